//! Body-weight dynamics: the Hall et al. 2011 adult model (two compartments) and its
//! linearisation used by Hall & Chow 2011 to estimate intake from weight.
//!
//! # The model ([`HallModel`])
//! Hall KD, Sacks G, Chandramohan D, et al. "Quantification of the effect of energy imbalance on
//! bodyweight." *Lancet* 2011;378:826–837, web appendix (constants below). State: fat mass F,
//! lean (fat-free) mass L, adaptive thermogenesis AT.
//!
//! - Energy balance: (ρF + ηF)·dF/dt + (ρL + ηL)·dL/dt = EI − E, where
//!   E = K + γF·F + γL·L + δ·BW + β_TEF·ΔEI + AT + A·BW
//!   (ΔEI = EI − EI₀; A = extra activity above baseline, net MET-hours per day, i.e. kcal per kg
//!   of body weight per day; the deposition costs ηF, ηL sit on the left-hand side).
//! - Forbes partition: dL/dF = C/F with C = 10.4 kg, hence L = L₀ + C·ln(F/F₀) and the state
//!   reduces to (F, AT).
//! - Adaptive thermogenesis: dAT/dt = (β_AT·ΔEI − AT)/τ_AT.
//! - δ = ((1 − β_TEF)·PAL − 1)·RMR₀/BW₀; K is chosen so that E = EI₀ = RMR₀·PAL at baseline.
//!
//! **Simplification:** the glycogen and extracellular-fluid compartments of the full model are
//! omitted (BW = F + L). They carry 1–2 kg of fast water/glycogen change in the first weeks, so
//! this model loses more slowly than the full model in the first month (day 7: −0.40 vs −0.74 kg
//! for a 100 kg man on −500 kcal/d) but agrees within about 0.3 kg from one year on (the
//! reference tests state the tolerances). Extra activity does not drive AT, which in the
//! published model responds to intake change only.
//!
//! Integration: classic Runge–Kutta (RK4) with a step of one day; intake and activity are held
//! constant through each day.
//!
//! # The linearisation ([`LinearisedModel`])
//! Hall KD, Chow CC. *Am J Clin Nutr* 2011;94:66–74 (citation details from memory): ΔEI(t) = ε·ΔBW(t) + ρ·dBW/dt, with (as in
//! the supplement of Sanghvi et al. *Am J Clin Nutr* 2015;102:353–358) α = C/FM₀,
//! ρ = (ηF + ρF + α·(ηL + ρL)) / ((1 − β)(1 + α)),
//! ε = [(γF + α·γL)/(1 + α) + δ₀] / (1 − β), β = β_TEF + β_AT; the Δδ term is taken as 0
//! (no change in activity per kg).

/// Energy density of fat mass, kcal/kg (Hall et al. 2011).
pub const RHO_F: f64 = 9440.7;
/// Energy density of lean mass, kcal/kg (Hall et al. 2011).
pub const RHO_L: f64 = 1816.4;
/// Resting expenditure per kg fat, kcal/kg/d (Hall et al. 2011).
pub const GAMMA_F: f64 = 3.107;
/// Resting expenditure per kg lean, kcal/kg/d (Hall et al. 2011).
pub const GAMMA_L: f64 = 21.99;
/// Cost of fat deposition/turnover, kcal/kg (Hall et al. 2011).
pub const ETA_F: f64 = 179.3;
/// Cost of lean deposition, kcal/kg (Hall et al. 2011).
pub const ETA_L: f64 = 229.4;
/// Thermic effect of an intake change, fraction (Hall et al. 2011).
pub const BETA_TEF: f64 = 0.10;
/// Adaptive thermogenesis per unit intake change, fraction (Hall et al. 2011).
pub const BETA_AT: f64 = 0.14;
/// Time constant of adaptive thermogenesis, days (Hall et al. 2011).
pub const TAU_AT: f64 = 14.0;
/// Forbes constant C in dL/dF = C/F, kg (Hall et al. 2011 parameter set; the underlying
/// partition is Forbes 2000, Ann N Y Acad Sci 904:359 — citation from memory).
pub const FORBES_C: f64 = 10.4;

/// Glycogen at baseline, kg, and the weight it carries per kg (glycogen plus about 2.7 kg of
/// water) (Hall et al. 2011 web appendix; from memory).
pub const GLYCOGEN_0_KG: f64 = 0.5;
/// Weight per kg glycogen stored (Hall et al. 2011; from memory).
pub const GLYCOGEN_WEIGHT_FACTOR: f64 = 3.7;
/// Sodium retention per unit fall in carbohydrate intake divided by the renal sodium clearance
/// per litre of extracellular fluid: ξ_CI/ξ_Na = 4000 mg/d / 3000 mg/L/d (Hall 2006, Am J
/// Physiol Endocrinol Metab 291:E23; Hall et al. 2011 appendix; from memory), litres ≈ kg.
pub const ECF_PER_CARB_FRACTION_KG: f64 = 4000.0 / 3000.0;

/// Weight of the fast compartments (glycogen with its water, extracellular fluid) that moves
/// per kcal/d of sustained intake change, kg per kcal/d, at baseline intake `ei0`.
///
/// # Formula
/// In Hall's adult model glycogen settles at G = G₀·√(CI/CI₀) within days and the
/// extracellular fluid at ΔECF = −(ξ_CI/ξ_Na)·(1 − CI/CI₀); with the carbohydrate share of
/// intake unchanged (CI/CI₀ = EI/EI₀ = x) the fast weight is 3.7·G₀·(√x − 1) + (ξ_CI/ξ_Na)(x − 1),
/// whose slope at x = 1 is 3.7·G₀/2 + ξ_CI/ξ_Na ≈ 2.26 kg per 100 % change; divided by EI₀.
/// This linearisation is what the estimator uses of the glycogen/ECF dynamics: a diet's first
/// days bring a fast drop of about κ·ΔEI that is water and glycogen, not tissue.
pub fn fast_compartment_kg_per_kcal(ei0: f64) -> f64 {
    (GLYCOGEN_WEIGHT_FACTOR * GLYCOGEN_0_KG / 2.0 + ECF_PER_CARB_FRACTION_KG) / ei0.max(500.0)
}

/// Smallest fat mass the integrator lets the model reach, kg (keeps ln(F/F₀) finite).
const MIN_FAT_KG: f64 = 0.5;

/// Energy content of a small change in body weight for a person with fat mass `fm_kg`,
/// kcal per kg of weight.
///
/// # Formula
/// With the Forbes partition the lean fraction of a weight change is p = C/(C + FM)
/// (Forbes 2000, Ann N Y Acad Sci 904:359, from memory), so the energy density is
/// (1 − p)·ρF + p·ρL (Hall 2008, Int J Obes 32:573, from memory, makes the point that it is
/// not constant).
pub fn energy_density_of_weight_change(fm_kg: f64) -> f64 {
    let p = FORBES_C / (FORBES_C + fm_kg);
    (1.0 - p) * RHO_F + p * RHO_L
}

/// State of the [`HallModel`]: fat mass and adaptive thermogenesis (lean mass follows from fat
/// mass by the Forbes partition).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HallState {
    /// Fat mass, kg.
    pub fat_kg: f64,
    /// Adaptive thermogenesis, kcal/d (negative when intake is cut).
    pub at_kcal: f64,
}

/// The Hall et al. 2011 adult body-weight model, two-compartment form (see the module docs).
#[derive(Debug, Clone, PartialEq)]
pub struct HallModel {
    /// Baseline body weight BW₀, kg.
    pub bw0: f64,
    /// Baseline fat mass F₀, kg.
    pub fm0: f64,
    /// Baseline lean mass L₀ = BW₀ − F₀, kg.
    pub lean0: f64,
    /// Baseline resting expenditure RMR₀, kcal/d.
    pub rmr0: f64,
    /// Baseline physical activity level (TEE/RMR).
    pub pal: f64,
    /// Baseline (maintenance) intake EI₀ = RMR₀·PAL, kcal/d.
    pub ei0: f64,
    /// Activity expenditure per kg body weight δ, kcal/kg/d.
    pub delta: f64,
    /// Constant K that balances expenditure and intake at baseline, kcal/d.
    pub k: f64,
}

impl HallModel {
    /// A model at energy balance with body weight `bw0` (kg), fat mass `fm0` (kg), resting
    /// expenditure `rmr0` (kcal/d) and activity level `pal`.
    ///
    /// # Formula
    /// EI₀ = RMR₀·PAL; δ = ((1 − β_TEF)·PAL − 1)·RMR₀/BW₀; K = EI₀ − γF·F₀ − γL·L₀ − δ·BW₀
    /// (Hall et al. 2011, web appendix).
    pub fn new(bw0: f64, fm0: f64, rmr0: f64, pal: f64) -> Self {
        let lean0 = bw0 - fm0;
        let ei0 = rmr0 * pal;
        let delta = ((1.0 - BETA_TEF) * pal - 1.0) * rmr0 / bw0;
        let k = ei0 - GAMMA_F * fm0 - GAMMA_L * lean0 - delta * bw0;
        HallModel {
            bw0,
            fm0,
            lean0,
            rmr0,
            pal,
            ei0,
            delta,
            k,
        }
    }

    /// The baseline state (F₀, AT = 0).
    pub fn baseline_state(&self) -> HallState {
        HallState {
            fat_kg: self.fm0,
            at_kcal: 0.0,
        }
    }

    /// Lean mass that goes with fat mass `fat_kg`: L = L₀ + C·ln(F/F₀) (Forbes partition).
    pub fn lean_for_fat(&self, fat_kg: f64) -> f64 {
        self.lean0 + FORBES_C * (fat_kg.max(MIN_FAT_KG) / self.fm0).ln()
    }

    /// Body weight of a state, kg.
    pub fn weight(&self, s: &HallState) -> f64 {
        s.fat_kg + self.lean_for_fat(s.fat_kg)
    }

    /// Fat mass at body weight `bw_kg` along the Forbes curve (Newton's method on
    /// F + L(F) − BW = 0, which is increasing in F).
    pub fn fat_for_weight(&self, bw_kg: f64) -> f64 {
        let mut f = (self.fm0 + (bw_kg - self.bw0) * self.fm0 / self.bw0).max(1.0);
        for _ in 0..50 {
            let g = f + self.lean_for_fat(f) - bw_kg;
            let dg = 1.0 + FORBES_C / f;
            let next = (f - g / dg).max(MIN_FAT_KG);
            if (next - f).abs() < 1e-12 {
                return next;
            }
            f = next;
        }
        f
    }

    /// The state at body weight `bw_kg` when intake has been `intake` kcal/d long enough for
    /// adaptive thermogenesis to settle (τ_AT = 14 d): AT = β_AT·(EI − EI₀).
    pub fn state_at_weight(&self, bw_kg: f64, intake: f64) -> HallState {
        HallState {
            fat_kg: self.fat_for_weight(bw_kg),
            at_kcal: BETA_AT * (intake - self.ei0),
        }
    }

    /// Total expenditure E of state `s` at intake `intake` (kcal/d) and extra activity
    /// `extra_met_hours` (net MET-hours per day), without the deposition costs (see module docs).
    pub fn expenditure(&self, s: &HallState, intake: f64, extra_met_hours: f64) -> f64 {
        let f = s.fat_kg.max(MIN_FAT_KG);
        let l = self.lean_for_fat(f);
        let bw = f + l;
        self.k
            + GAMMA_F * f
            + GAMMA_L * l
            + self.delta * bw
            + BETA_TEF * (intake - self.ei0)
            + s.at_kcal
            + extra_met_hours * bw
    }

    /// Time derivatives (dF/dt in kg/d, dAT/dt in kcal/d²) of state `s`.
    pub fn derivatives(&self, s: &HallState, intake: f64, extra_met_hours: f64) -> (f64, f64) {
        let f = s.fat_kg.max(MIN_FAT_KG);
        let storage = (RHO_F + ETA_F) + (RHO_L + ETA_L) * FORBES_C / f;
        let df = (intake - self.expenditure(s, intake, extra_met_hours)) / storage;
        let dat = (BETA_AT * (intake - self.ei0) - s.at_kcal) / TAU_AT;
        (df, dat)
    }

    /// Instantaneous rate of weight change dBW/dt = dF/dt·(1 + C/F), kg/d.
    pub fn weight_slope(&self, s: &HallState, intake: f64, extra_met_hours: f64) -> f64 {
        let (df, _) = self.derivatives(s, intake, extra_met_hours);
        df * (1.0 + FORBES_C / s.fat_kg.max(MIN_FAT_KG))
    }

    /// One RK4 step of one day with intake and activity held constant over the day.
    pub fn step(&self, s: &HallState, intake: f64, extra_met_hours: f64) -> HallState {
        let add = |s: &HallState, d: (f64, f64), h: f64| HallState {
            fat_kg: (s.fat_kg + h * d.0).max(MIN_FAT_KG),
            at_kcal: s.at_kcal + h * d.1,
        };
        let k1 = self.derivatives(s, intake, extra_met_hours);
        let k2 = self.derivatives(&add(s, k1, 0.5), intake, extra_met_hours);
        let k3 = self.derivatives(&add(s, k2, 0.5), intake, extra_met_hours);
        let k4 = self.derivatives(&add(s, k3, 1.0), intake, extra_met_hours);
        HallState {
            fat_kg: (s.fat_kg + (k1.0 + 2.0 * k2.0 + 2.0 * k3.0 + k4.0) / 6.0).max(MIN_FAT_KG),
            at_kcal: s.at_kcal + (k1.1 + 2.0 * k2.1 + 2.0 * k3.1 + k4.1) / 6.0,
        }
    }

    /// Runs the model from `start` for `days` days. `intake(d)` is the intake (kcal/d) and
    /// `extra_activity(d)` the extra activity (net MET-hours per day, i.e. kcal/kg/d) on day
    /// `d` = 0, 1, …. Returns the `days + 1` states of days 0..=days.
    pub fn simulate_from(
        &self,
        start: HallState,
        days: usize,
        intake: impl Fn(usize) -> f64,
        extra_activity: impl Fn(usize) -> f64,
    ) -> Vec<HallState> {
        let mut out = Vec::with_capacity(days + 1);
        let mut s = start;
        out.push(s);
        for d in 0..days {
            s = self.step(&s, intake(d), extra_activity(d));
            out.push(s);
        }
        out
    }

    /// Runs the model from baseline for `days` days and returns body weight (kg) on days
    /// 0..=days. See [`HallModel::simulate_from`] for the two functions.
    pub fn simulate(
        &self,
        days: usize,
        intake: impl Fn(usize) -> f64,
        extra_activity: impl Fn(usize) -> f64,
    ) -> Vec<f64> {
        self.simulate_from(self.baseline_state(), days, intake, extra_activity)
            .iter()
            .map(|s| self.weight(s))
            .collect()
    }

    /// [`HallModel::simulate`] with constant intake (kcal/d) and constant extra activity
    /// (net MET-hours per day).
    pub fn simulate_constant(&self, days: usize, intake: f64, extra_activity: f64) -> Vec<f64> {
        self.simulate(days, |_| intake, |_| extra_activity)
    }

    /// Body weight at which the model comes to rest with constant intake and extra activity, kg;
    /// `None` when no steady state with positive fat mass exists.
    ///
    /// # Formula
    /// At steady state dF/dt = 0 and AT = β_AT·ΔEI, so EI = E(F); E increases with F, so the
    /// root is found by bisection on F.
    pub fn steady_state_weight(&self, intake: f64, extra_met_hours: f64) -> Option<f64> {
        let at = BETA_AT * (intake - self.ei0);
        let g = |f: f64| {
            intake
                - self.expenditure(
                    &HallState {
                        fat_kg: f,
                        at_kcal: at,
                    },
                    intake,
                    extra_met_hours,
                )
        };
        let (mut lo, mut hi) = (MIN_FAT_KG, 1000.0);
        if g(lo) < 0.0 || g(hi) > 0.0 {
            return None;
        }
        for _ in 0..200 {
            let mid = 0.5 * (lo + hi);
            if g(mid) > 0.0 {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        let f = 0.5 * (lo + hi);
        Some(f + self.lean_for_fat(f))
    }
}

/// The linearised energy-balance model of Hall & Chow 2011 (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LinearisedModel {
    /// Effective energy density of weight change ρ, kcal/kg.
    pub rho: f64,
    /// Change in expenditure per kg of weight change ε, kcal/kg/d.
    pub epsilon: f64,
    /// Time constant τ = ρ/ε, days.
    pub tau: f64,
}

impl LinearisedModel {
    /// Parameters for a person with baseline weight `bw0` (kg), fat mass `fm0` (kg), resting
    /// expenditure `rmr0` (kcal/d) and activity level `pal`.
    ///
    /// # Formula
    /// α = C/FM₀; ρ = (ηF + ρF + α(ηL + ρL)) / ((1 − β)(1 + α));
    /// ε = [(γF + αγL)/(1 + α) + δ₀] / (1 − β); δ₀ = ((1 − β_TEF)·PAL − 1)·RMR₀/BW₀;
    /// β = β_TEF + β_AT; τ = ρ/ε (Hall & Chow 2011; Sanghvi et al. 2015 supplement).
    pub fn from_baseline(bw0: f64, fm0: f64, rmr0: f64, pal: f64) -> Self {
        let alpha = FORBES_C / fm0;
        let beta = BETA_TEF + BETA_AT;
        let rho = (ETA_F + RHO_F + alpha * (ETA_L + RHO_L)) / ((1.0 - beta) * (1.0 + alpha));
        let delta0 = ((1.0 - BETA_TEF) * pal - 1.0) * rmr0 / bw0;
        let epsilon = ((GAMMA_F + alpha * GAMMA_L) / (1.0 + alpha) + delta0) / (1.0 - beta);
        LinearisedModel {
            rho,
            epsilon,
            tau: rho / epsilon,
        }
    }

    /// Change in intake from baseline implied by a weight change and the current slope, kcal/d.
    ///
    /// # Formula
    /// ΔEI = ε·ΔBW + ρ·dBW/dt (Hall & Chow 2011), ΔBW in kg, `slope_kg_per_day` in kg/d.
    pub fn implied_intake_change(&self, delta_bw: f64, slope_kg_per_day: f64) -> f64 {
        self.epsilon * delta_bw + self.rho * slope_kg_per_day
    }

    /// Eventual weight change for a sustained intake change, kg: ΔBW∞ = ΔEI/ε.
    pub fn steady_state_change(&self, delta_ei: f64) -> f64 {
        delta_ei / self.epsilon
    }

    /// Weight change `t_days` after a step change in intake, kg:
    /// ΔBW(t) = (ΔEI/ε)·(1 − e^(−t/τ)).
    pub fn weight_change_at(&self, delta_ei: f64, t_days: f64) -> f64 {
        self.steady_state_change(delta_ei) * (1.0 - (-t_days / self.tau).exp())
    }

    /// Half-time of the response, days: τ·ln 2.
    pub fn half_time(&self) -> f64 {
        self.tau * std::f64::consts::LN_2
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    fn model() -> HallModel {
        HallModel::new(100.0, 29.6, 1930.0, 1.6)
    }

    #[test]
    fn baseline_is_at_energy_balance() {
        let m = model();
        let w = m.simulate_constant(365, m.ei0, 0.0);
        for x in w {
            assert_abs_diff_eq!(x, 100.0, epsilon = 1e-9);
        }
    }

    #[test]
    fn fat_for_weight_inverts_the_forbes_curve() {
        let m = model();
        for bw in [70.0, 90.0, 100.0, 120.0] {
            let f = m.fat_for_weight(bw);
            assert_abs_diff_eq!(f + m.lean_for_fat(f), bw, epsilon = 1e-9);
        }
        assert_abs_diff_eq!(m.fat_for_weight(100.0), 29.6, epsilon = 1e-9);
    }

    #[test]
    fn steady_state_matches_a_long_simulation() {
        let m = model();
        let ss = m.steady_state_weight(m.ei0 - 300.0, 0.0).unwrap();
        let w = m.simulate_constant(20 * 365, m.ei0 - 300.0, 0.0);
        assert_abs_diff_eq!(*w.last().unwrap(), ss, epsilon = 0.01);
        assert!(ss < 100.0);
    }

    #[test]
    fn extra_activity_lowers_weight_and_intake_rise_raises_it() {
        let m = model();
        let walk = m.simulate_constant(200, m.ei0, 2.5);
        let eat = m.simulate_constant(200, m.ei0 + 200.0, 0.0);
        assert!(walk[200] < 99.0);
        assert!(eat[200] > 101.0);
    }
}

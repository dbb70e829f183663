//! The fast part of body weight (glycogen with its water, extracellular fluid) that follows
//! food intake within days, estimated from the food log so that plateaus are judged on body
//! tissue rather than on water.
//!
//! # Why
//! In Hall's adult model (Hall et al. 2011, *Lancet* 378:826, web appendix; Hall 2006, *Am J
//! Physiol Endocrinol Metab* 291:E23) glycogen settles at G = G₀·√(CI/CI₀) within days and the
//! extracellular fluid at ΔECF = −(ξ_CI/ξ_Na)·(1 − CI/CI₀). When intake drifts up over weeks
//! (adherence fading), glycogen and water refill and the scale flattens before the loss of fat
//! and lean tissue has stopped; when intake falls they drain. A plateau is a stall of tissue
//! loss, so the plateau search subtracts this fast weight before judging the slope.
//!
//! # Formula
//! With the carbohydrate share of intake unchanged, CI/CI₀ = EI/EI₀ = x and the fast weight is
//! 3.7·G₀·(√x − 1) + (ξ_CI/ξ_Na)·(x − 1) ≈ κ·(x − 1) near x = 1, κ = 3.7·G₀/2 + ξ_CI/ξ_Na ≈
//! 2.26 kg (G₀ = 0.5 kg, 3.7 kg of weight per kg glycogen, ξ_CI = 4000 mg/d, ξ_Na = 3000 mg/L/d;
//! Hall et al. 2011 appendix, values from memory). x(t) is read from the log as the mean logged
//! intake of the 15 days centred on t divided by the mean over all logged days: a constant
//! under-reporting share cancels in the ratio, and only changes of x matter for slopes.

use chrono::NaiveDate;
use cohortpress_metric_api::IntakeDay;

/// Fast weight per 100 % change of intake, kg (see the module documentation).
pub const FAST_KG_PER_RELATIVE_INTAKE: f64 = 3.7 * 0.5 / 2.0 + 4000.0 / 3000.0;

/// Half-width of the centred window over which logged intake is averaged, days.
const HALF_WINDOW_DAYS: usize = 7;
/// Logged days a window needs for its mean to be used.
const MIN_DAYS_IN_WINDOW: usize = 5;
/// Logged days the whole log needs before any correction is made.
const MIN_LOGGED_DAYS: usize = 28;

/// Logged intake per grid day (day 0 = `first`, `grid_len` days), kcal/d: the mean of the
/// logged days in the 15 days centred on each day, held to 0.5–1.5 × the mean of all logged
/// days (a window dominated by a logging slip must not move the estimate further); `None` when
/// the log is too thin to say anything. Days whose centred window holds too few logged days take
/// the nearest estimated day's value (no information about a change there, so none is assumed).
pub fn smoothed_intake(intake: &[IntakeDay], first: NaiveDate, grid_len: usize) -> Option<Logged> {
    let kcal = daily_totals(intake, first, grid_len);
    let logged: Vec<f64> = kcal.iter().flatten().copied().collect();
    if logged.len() < MIN_LOGGED_DAYS {
        return None;
    }
    let reference = logged.iter().sum::<f64>() / logged.len() as f64;
    let mut x: Vec<Option<f64>> = (0..grid_len)
        .map(|t| {
            let s = t.saturating_sub(HALF_WINDOW_DAYS);
            let e = (t + HALF_WINDOW_DAYS).min(grid_len - 1);
            let w: Vec<f64> = kcal[s..=e].iter().flatten().copied().collect();
            (w.len() >= MIN_DAYS_IN_WINDOW).then(|| {
                (w.iter().sum::<f64>() / w.len() as f64).clamp(0.5 * reference, 1.5 * reference)
            })
        })
        .collect();
    // Fill the gaps from the nearest estimated day (forward, then the leading gap backward).
    let mut last = None;
    for v in x.iter_mut() {
        match v {
            Some(_) => last = *v,
            None => *v = last,
        }
    }
    let first_known = x.iter().flatten().next().copied()?;
    Some(Logged {
        per_day: x.into_iter().map(|v| v.unwrap_or(first_known)).collect(),
        mean: reference,
    })
}

/// The smoothed logged intake ([`smoothed_intake`]).
#[derive(Debug, Clone, PartialEq)]
pub struct Logged {
    /// Per grid day, kcal/d.
    pub per_day: Vec<f64>,
    /// Mean of all logged days' totals, kcal/d (the reference the fast weight is relative to).
    pub mean: f64,
}

/// Estimated fast weight per grid day, kg, relative to the person's mean logged intake.
pub fn fast_weight(logged: &Logged) -> Vec<f64> {
    logged
        .per_day
        .iter()
        .map(|v| FAST_KG_PER_RELATIVE_INTAKE * (v / logged.mean - 1.0))
        .collect()
}

/// Change of the tissue slope per change of logged intake, (kg/d) per (kcal/d), before the
/// person's own factor is estimated ([`intake_control`]).
///
/// # Formula
/// In Hall's adult model a lasting change of intake ΔEI changes expenditure at once by the
/// thermic effect (β_TEF = 0.1) and by adaptive thermogenesis (β_AT = 0.14), so the energy
/// left for tissue changes by (1 − β_TEF − β_AT)·ΔEI, and tissue changes by that over ρ ≈
/// 7700 kcal/kg (fat 39.5 MJ/kg and lean 7.6 MJ/kg, mixed by the Forbes partition of a
/// person with overweight; Hall et al. 2011, *Lancet* 378:826, web appendix; values from
/// memory). Logged intake is a share (1 − u) of true intake; u = 0.2 is the middle of
/// doubly-labelled-water studies' under-reporting (Trabulsi & Schoeller 2001, *Am J Physiol
/// Endocrinol Metab* 281:E891, a review of them; the middle value from memory). Person-specific factors (their u, their body
/// fat) are left to the likelihood ([`INTAKE_GAIN_FACTORS`]).
pub const INTAKE_GAIN_KG_PER_KCAL: f64 = (1.0 - 0.1 - 0.14) / ((1.0 - 0.2) * 7700.0);

/// Factors on [`INTAKE_GAIN_KG_PER_KCAL`] compared by likelihood, person by person; 0 is the
/// model without the log (the log tells nothing about this person's slope changes), the rest
/// span under-reporting of 0–40 % and a ±15 % energy density (program choice).
pub const INTAKE_GAIN_FACTORS: [f64; 6] = [0.0, 0.6, 0.8, 1.0, 1.25, 1.6];

/// Upper limit of `log10 r` (r = q/σ²_ε, 1/d³) for the tissue trend's own slope wander.
///
/// # Why
/// Day-to-day scale scatter is correlated (water, gut content, clothing; weekly rhythms), and
/// the trend model treats it as independent, so on daily weigh-ins the likelihood prefers a
/// slope that follows the scatter: r at the top of its range (10⁻¹), a slope that moves by
/// tenths of a kilogram a day within days. Tissue cannot do that: its slope is the energy
/// balance, which moves when intake or activity moves, and intake is the known input. Beyond
/// the input the slope may wander by √(r·σ²_ε·28) ≈ 0.008 kg/d (0.06 kg/week) over four weeks at
/// σ_ε = 0.5 kg — slow changes the log misses. Program choice; on the project's simulated
/// cohorts it raised plateau onsets found within ±14 days from 55 % to 61 % (seed 20261202)
/// and 56 % to 60 % (seed 7), and cut plateaus reported without a true one from 11 % to 8 %
/// (seed 20261202; VALIDATION.md).
pub const TISSUE_MAX_LOG10_SNR: f64 = -5.0;

/// Log-likelihood gain of the free slope over the held one ([`TISSUE_MAX_LOG10_SNR`]) beyond
/// which the held slope is rejected for this person (a likelihood ratio of e²⁰; correlated
/// scatter inflates the ratio, so the usual χ² levels would reject far too often). Program
/// choice: on the project's simulated cohorts 95 % of people gain less than 10 and the gains
/// beyond 20 come with behaviour the log does not show; a logged-intake-constant stop after
/// eight weeks of loss gains about 70.
pub const TISSUE_HELD_SLOPE_REJECTED: f64 = 20.0;

/// The known input of the tissue trend (see [`crate::llt::kalman_filter_controlled`]) at
/// increasing whole-day `times` (grid days of `x`), from the smoothed logged intake `x`
/// ([`smoothed_intake`]) and the gain `beta`.
///
/// # Formula
/// On a daily grid the slope follows intake, `ν_{k+1} = ν_k + β·(x_{k+1} − x_k)` (plus the
/// trend's own random walk), and the level integrates the slope. Over a step from day `a` to
/// day `b` this adds `β·(x_b − x_a)` to the slope and `β·Σ_{k=a+1}^{b−1}(x_k − x_a)` to the
/// level beyond the transition's `(b − a)·ν_a` — the exact composition of the daily steps.
pub fn intake_control(x: &[f64], times: &[f64], beta: f64) -> Vec<crate::llt::Vec2> {
    let mut out = Vec::with_capacity(times.len());
    for (i, &t) in times.iter().enumerate() {
        if i == 0 {
            out.push([0.0, 0.0]);
            continue;
        }
        let a = times[i - 1] as usize;
        let b = (t as usize).min(x.len() - 1);
        let a = a.min(b);
        let level: f64 = x[a + 1..b.max(a + 1)].iter().map(|v| v - x[a]).sum();
        out.push([beta * level, beta * (x[b] - x[a])]);
    }
    out
}

/// Each grid day's logged total, kcal (`None` for a day without a usable entry).
fn daily_totals(intake: &[IntakeDay], first: NaiveDate, grid_len: usize) -> Vec<Option<f64>> {
    let mut kcal: Vec<Option<f64>> = vec![None; grid_len];
    for d in intake {
        let Ok(i) = usize::try_from((d.date - first).num_days()) else {
            continue;
        };
        if i < grid_len && d.kcal.is_finite() && d.kcal > 0.0 {
            *kcal[i].get_or_insert(0.0) += d.kcal;
        }
    }
    kcal
}

#[cfg(test)]
mod tests {
    use super::*;

    fn day(d: u64) -> NaiveDate {
        NaiveDate::from_ymd_opt(2027, 1, 4).unwrap() + chrono::Days::new(d)
    }

    fn log(d: u64, kcal: f64) -> IntakeDay {
        IntakeDay {
            date: day(d),
            kcal,
            carbs_g: None,
            fat_g: None,
            protein_g: None,
            free_sugars_g: None,
        }
    }

    #[test]
    fn a_rise_in_intake_refills_the_fast_weight_by_kappa_times_the_relative_change() {
        // 60 days at 1600 kcal, then 60 at 2000: mean 1800, x = 0.889 then 1.111.
        let logs: Vec<IntakeDay> = (0..120)
            .map(|d| log(d, if d < 60 { 1600.0 } else { 2000.0 }))
            .collect();
        let f = fast_weight(&smoothed_intake(&logs, day(0), 120).unwrap());
        let k = FAST_KG_PER_RELATIVE_INTAKE;
        assert!((f[20] - k * (1600.0 / 1800.0 - 1.0)).abs() < 1e-9);
        assert!((f[100] - k * (2000.0 / 1800.0 - 1.0)).abs() < 1e-9);
        // The step: 400/1800 of κ ≈ 0.50 kg, spread over the 15-day window.
        assert!((f[100] - f[20] - 0.502).abs() < 0.01);
        assert!(f[60] > f[52] && f[60] < f[68]);
    }

    #[test]
    fn a_thin_log_gives_no_correction_and_gaps_carry_the_nearest_value() {
        let logs: Vec<IntakeDay> = (0..20).map(|d| log(d, 1800.0)).collect();
        assert!(smoothed_intake(&logs, day(0), 100).is_none());
        // Logged only in days 0–39; later days carry day 39's window mean.
        let logs: Vec<IntakeDay> = (0..40)
            .map(|d| log(d, if d < 20 { 1500.0 } else { 2100.0 }))
            .collect();
        let f = fast_weight(&smoothed_intake(&logs, day(0), 100).unwrap());
        assert_eq!(f[99], f[45]);
        assert!(f[45] > 0.0 && f[5] < 0.0);
    }
}

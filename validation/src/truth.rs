//! The truth simulator: people, their behaviour and their bodies, day by day.
//!
//! It is deliberately richer than the estimators it scores and shares no code with them (nor
//! with the demo-program generator): it has its own implementation of the full adult model of
//! Hall et al. 2011 (*Lancet* 378:826, web appendix) with fat, lean tissue, glycogen and
//! extracellular water, person-to-person variation in resting energy, activity level and
//! adaptive thermogenesis, weekend eating, day-to-day intake scatter, drifting and stopping
//! adherence, under-reported food logs, and weigh-ins with weekly rhythm, AR(1) correlated
//! day-to-day fluid scatter, clothed clinic weigh-ins and different weighing habits.
//!
//! Constants of the body model (kcal, kg, days) are the published ones (Hall et al. 2011 web
//! appendix; glycogen and extracellular-fluid terms after Hall 2006, *Am J Physiol Endocrinol
//! Metab* 291:E23, constants from memory). Behavioural and measurement constants are choices of
//! this simulator, chosen to span what the literature describes rather than to match any
//! estimator; they are listed in VALIDATION.md.

use crate::rng::Rng;

/// Energy density of fat, kcal/kg (Hall et al. 2011).
const RHO_F: f64 = 9440.7;
/// Energy density of lean tissue, kcal/kg (Hall et al. 2011).
const RHO_L: f64 = 1816.4;
/// Energy density of glycogen, kcal/kg (Hall et al. 2011).
const RHO_G: f64 = 4206.5;
/// Resting expenditure per kg fat and lean, kcal/kg/d (Hall et al. 2011).
const GAMMA_F: f64 = 3.107;
const GAMMA_L: f64 = 21.99;
/// Deposition costs, kcal/kg (Hall et al. 2011).
const ETA_F: f64 = 179.3;
const ETA_L: f64 = 229.4;
/// Thermic effect of an intake change (Hall et al. 2011).
const BETA_TEF: f64 = 0.10;
/// Adaptive-thermogenesis time constant, d (Hall et al. 2011).
const TAU_AT: f64 = 14.0;
/// Forbes constant, kg (Forbes 2000, Ann N Y Acad Sci 904:359; from memory).
const FORBES: f64 = 10.4;
/// Baseline glycogen, kg, and water stored with each kg (Hall et al. 2011; from memory).
const G0: f64 = 0.5;
const GLYCOGEN_WEIGHT_FACTOR: f64 = 3.7;
/// Extracellular sodium concentration g/L, sodium excretion per litre of ECF excess mg/L/d,
/// and the carbohydrate effect on sodium retention mg/d (Hall 2006; from memory).
const NA_CONC_MG_PER_L: f64 = 3220.0;
const XI_NA: f64 = 3000.0;
const XI_CI: f64 = 4000.0;
/// Habitual sodium intake, mg/d (simulator choice).
const NA_INTAKE: f64 = 3500.0;

/// Behavioural archetype.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Archetype {
    /// Holds one energy deficit throughout.
    Steady,
    /// Starts with a deficit that fades back towards the old habits.
    Drifting,
    /// Keeps the deficit for a while, then stops and eats above maintenance (regains); some of
    /// them also stop weighing.
    Stopper,
    /// Withdraws from the program in its first weeks.
    EarlyWithdrawal,
    /// Barely changes intake.
    Maintainer,
}

impl Archetype {
    /// All archetypes, in table order.
    pub const ALL: [Archetype; 5] = [
        Archetype::Steady,
        Archetype::Drifting,
        Archetype::Stopper,
        Archetype::EarlyWithdrawal,
        Archetype::Maintainer,
    ];
    /// Short name.
    pub fn name(self) -> &'static str {
        match self {
            Archetype::Steady => "steady adherent",
            Archetype::Drifting => "drifting adherence",
            Archetype::Stopper => "stops and regains",
            Archetype::EarlyWithdrawal => "early withdrawal",
            Archetype::Maintainer => "little change",
        }
    }
}

/// How a person weighs.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub enum Weighing {
    /// Nearly every day at home.
    Daily,
    /// About every other day.
    Frequent,
    /// Once a week on a fixed weekday.
    Weekly,
    /// Now and then.
    Sporadic,
    /// Only clothed at the clinic every two weeks.
    ClinicOnly,
}

impl Weighing {
    /// All patterns.
    pub const ALL: [Weighing; 5] = [
        Weighing::Daily,
        Weighing::Frequent,
        Weighing::Weekly,
        Weighing::Sporadic,
        Weighing::ClinicOnly,
    ];
    /// Short name.
    pub fn name(self) -> &'static str {
        match self {
            Weighing::Daily => "daily",
            Weighing::Frequent => "every other day",
            Weighing::Weekly => "weekly",
            Weighing::Sporadic => "sporadic",
            Weighing::ClinicOnly => "clinic only",
        }
    }
}

/// One simulated weigh-in.
#[derive(Debug, Clone, PartialEq)]
pub struct Obs {
    /// Day index (0 = enrolment).
    pub day: usize,
    /// Scale reading, kg.
    pub kg: f64,
    /// `home-scale` or `clinic`.
    pub source: &'static str,
}

/// A logged walk.
#[derive(Debug, Clone, PartialEq)]
pub struct Walk {
    /// Day index.
    pub day: usize,
    /// Minutes.
    pub minutes: f64,
    /// MET.
    pub met: f64,
}

/// One simulated person: profile, behaviour, truth and what they recorded.
#[derive(Debug, Clone)]
pub struct Person {
    /// Index in the cohort.
    pub index: usize,
    /// Male?
    pub male: bool,
    /// Age at enrolment, years.
    pub age: f64,
    /// Height, cm.
    pub height_cm: f64,
    /// Behaviour.
    pub archetype: Archetype,
    /// Weighing habit.
    pub weighing: Weighing,
    /// True physical activity level (TEE/RMR at baseline).
    pub pal: f64,
    /// True resting energy at baseline, kcal/d.
    pub rmr0: f64,
    /// Fraction of intake left out of the food log (0.2 = 20 % under-reported).
    pub underreport: f64,
    /// Day the person withdrew (stopped recording), if they did.
    pub withdrew: Option<usize>,
    /// True body weight per day, kg (days 0..n).
    pub bw: Vec<f64>,
    /// True tissue mass (fat + lean tissue, without glycogen and extracellular water) per day,
    /// kg: the slow part of body weight that plateaus and regain are judged on.
    pub tissue: Vec<f64>,
    /// True intake per day, kcal.
    pub intake: Vec<f64>,
    /// True total expenditure per day, kcal.
    pub tee: Vec<f64>,
    /// Recorded weigh-ins.
    pub obs: Vec<Obs>,
    /// Logged intake: (day, kcal).
    pub logs: Vec<(usize, f64)>,
    /// Logged walks.
    pub walks: Vec<Walk>,
}

/// The simulated body state.
#[derive(Debug, Clone, Copy)]
struct Body {
    fat: f64,
    lean: f64,
    glycogen: f64,
    ecf: f64,
    at: f64,
}

struct Physiology {
    fat0: f64,
    ecf0: f64,
    ei0: f64,
    ci0: f64,
    k: f64,
    delta: f64,
    beta_at: f64,
    k_g: f64,
}

impl Physiology {
    fn weight(&self, b: &Body) -> f64 {
        b.fat + b.lean + b.ecf + GLYCOGEN_WEIGHT_FACTOR * b.glycogen
    }

    /// Expenditure without deposition costs, kcal/d; `walk_kcal` is the net walking energy.
    fn expenditure(&self, b: &Body, ei: f64, walk_kcal: f64) -> f64 {
        let bw = self.weight(b);
        self.k
            + GAMMA_F * b.fat
            + GAMMA_L * b.lean
            + self.delta * bw
            + BETA_TEF * (ei - self.ei0)
            + b.at
            + walk_kcal
    }

    /// Derivatives; returns (dF, dL, dG, dECF, dAT) and the expenditure including deposition.
    fn rates(&self, b: &Body, ei: f64, carb_frac: f64, walk_kcal: f64) -> ([f64; 5], f64) {
        let ci = carb_frac * ei;
        let dg = (ci - self.k_g * b.glycogen * b.glycogen) / RHO_G;
        let na_in = NA_INTAKE * ei / self.ei0;
        let decf =
            (na_in - NA_INTAKE - XI_NA * (b.ecf - self.ecf0) - XI_CI * (1.0 - ci / self.ci0))
                / NA_CONC_MG_PER_L;
        let e = self.expenditure(b, ei, walk_kcal);
        let avail = ei - e - RHO_G * dg;
        let p = FORBES / b.fat.max(0.5); // dL/dF
        let df = avail / ((RHO_F + ETA_F) + (RHO_L + ETA_L) * p);
        let dl = p * df;
        let dat = (self.beta_at * (ei - self.ei0) - b.at) / TAU_AT;
        ([df, dl, dg, decf, dat], e + ETA_F * df + ETA_L * dl)
    }
}

/// Mifflin–St Jeor resting energy (Mifflin et al. 1990, Am J Clin Nutr 51:241); kg, cm, y.
fn mifflin(male: bool, kg: f64, cm: f64, age: f64) -> f64 {
    10.0 * kg + 6.25 * cm - 5.0 * age + if male { 5.0 } else { -161.0 }
}

/// How a simulated cohort departs from this simulator's own ranges, to see whether the
/// estimators stay calibrated on people unlike those they were checked on (VALIDATION.md,
/// "Stress runs"). Every scenario draws the same random numbers in the same order; only the
/// ranges they are mapped to differ, so [`Scenario::BASE`] is exactly [`simulate`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Scenario {
    /// Short name for tables.
    pub name: &'static str,
    /// Factor on the marginal SD of the day-to-day fluid scatter (drawn from 0.35–0.9 kg).
    pub noise: f64,
    /// Largest lag-one autocorrelation of that scatter (drawn from 0.3 to this).
    pub phi_max: f64,
    /// Range of the physical activity level.
    pub pal: (f64, f64),
    /// Largest share of intake left out of the food log (drawn from 0 to this).
    pub underreport_max: f64,
    /// SD of resting energy around Mifflin–St Jeor, as a fraction.
    pub rmr_sd: f64,
    /// Range of the clothing at clinic weigh-ins, kg.
    pub clothes: (f64, f64),
    /// Food logs stay at the diet's level when eating drifts back or relapses: the day's log is
    /// what the diet's intake would have been that day (same weekday and day-to-day scatter),
    /// less the person's usual share, so the share left out grows with the relapse.
    pub logs_keep_diet: bool,
}

impl Scenario {
    /// The simulator's own ranges (VALIDATION.md's main results).
    pub const BASE: Scenario = Scenario {
        name: "as simulated",
        noise: 1.0,
        phi_max: 0.8,
        pal: (1.35, 1.95),
        underreport_max: 0.40,
        rmr_sd: 0.07,
        clothes: (0.6, 1.6),
        logs_keep_diet: false,
    };

    /// Departures from [`Scenario::BASE`], one at a time, then all together.
    pub const STRESS: [Scenario; 7] = [
        Scenario {
            name: "scales 1.5× as noisy, scatter more correlated (φ up to 0.9)",
            noise: 1.5,
            phi_max: 0.9,
            ..Scenario::BASE
        },
        Scenario {
            name: "activity level 1.2–2.2 (wider than the prior)",
            pal: (1.2, 2.2),
            ..Scenario::BASE
        },
        Scenario {
            name: "under-reporting up to 60 %",
            underreport_max: 0.60,
            ..Scenario::BASE
        },
        Scenario {
            name: "resting energy ±12 % around Mifflin–St Jeor",
            rmr_sd: 0.12,
            ..Scenario::BASE
        },
        Scenario {
            name: "clinic clothing 0–3 kg",
            clothes: (0.0, 3.0),
            ..Scenario::BASE
        },
        Scenario {
            name: "all of the above together",
            noise: 1.5,
            phi_max: 0.9,
            pal: (1.2, 2.2),
            underreport_max: 0.60,
            rmr_sd: 0.12,
            clothes: (0.0, 3.0),
            logs_keep_diet: false,
        },
        Scenario {
            name: "food logs kept at the diet's level while eating drifts back or relapses (not in S6)",
            logs_keep_diet: true,
            ..Scenario::BASE
        },
    ];
}

/// Simulates one person for `days` days.
pub fn simulate(seed: u64, index: usize, days: usize) -> Person {
    simulate_in(seed, index, days, &Scenario::BASE)
}

/// [`simulate`] with the ranges of `sc`.
pub fn simulate_in(seed: u64, index: usize, days: usize, sc: &Scenario) -> Person {
    let mut r = Rng::new(seed, index as u64 + 1);
    let male = r.chance(0.4);
    let age = r.range(25.0, 66.0);
    let height_cm = if male {
        r.gauss(177.0, 7.0)
    } else {
        r.gauss(163.0, 6.5)
    };
    let bmi = r.range(26.0, 42.0);
    let bw0 = bmi * (height_cm / 100.0).powi(2);
    // Body fat: Jackson et al. 2002 (Int J Obes 26:789) plus individual scatter of about the
    // equation's standard error (≈4 points, from memory).
    let jackson = if male {
        0.14 * age + 37.31 * bmi.ln() - 103.94
    } else {
        0.14 * age + 39.96 * bmi.ln() - 102.01
    };
    let bf = (jackson + r.gauss(0.0, 4.0)).clamp(12.0, 60.0);
    let fat0 = bw0 * bf / 100.0;
    // Extracellular fluid at baseline (Hall et al. 2011 appendix, from memory), litres ≈ kg.
    let hm = height_cm / 100.0;
    let ecf0 = if male {
        0.025 * age + 9.57 * hm + 0.191 * bw0 - 12.4
    } else {
        -4.0 + 5.98 * hm + 0.167 * bw0
    };
    let lean0 = bw0 - fat0 - ecf0 - GLYCOGEN_WEIGHT_FACTOR * G0;
    // Resting energy differs from Mifflin's prediction person to person (the equation predicts
    // within ±10 % for more adults than any other equation; Frankenfield et al. 2005, J Am Diet
    // Assoc 105:775).
    let rmr0 = mifflin(male, bw0, height_cm, age) * (1.0 + r.gauss(0.0, sc.rmr_sd));
    // Physical activity level across FAO/WHO/UNU 2004 "sedentary" to "active".
    let pal = r.range(sc.pal.0, sc.pal.1);
    let ei0 = rmr0 * pal;
    let carb_frac = r.range(0.40, 0.55);
    let ci0 = carb_frac * ei0;
    let delta = ((1.0 - BETA_TEF) * pal - 1.0) * rmr0 / bw0;
    let k = ei0 - GAMMA_F * fat0 - GAMMA_L * lean0 - delta * bw0;
    let phys = Physiology {
        fat0,
        ecf0,
        ei0,
        ci0,
        k,
        delta,
        beta_at: r.gauss(0.14, 0.04).clamp(0.0, 0.3),
        k_g: ci0 / (G0 * G0),
    };
    let _ = phys.fat0;

    let archetype = Archetype::ALL[r.pick(&[0.30, 0.25, 0.20, 0.10, 0.15])];
    let weighing = Weighing::ALL[r.pick(&[0.30, 0.25, 0.20, 0.15, 0.10])];

    // Planned change in intake by day, kcal/d, and the withdrawal day.
    let deficit = r.range(300.0, 850.0);
    let mut withdrew = None;
    let plan: Vec<f64> = match archetype {
        Archetype::Steady => vec![-deficit; days],
        Archetype::Drifting => {
            let t0 = r.range(20.0, 70.0);
            let len = r.range(30.0, 90.0);
            let keep = r.range(0.0, 0.35);
            (0..days)
                .map(|d| {
                    let f = ((d as f64 - t0) / len).clamp(0.0, 1.0);
                    -deficit * (1.0 - f * (1.0 - keep))
                })
                .collect()
        }
        Archetype::Stopper => {
            let stop = r.range(45.0, 120.0) as usize;
            let over = r.range(50.0, 400.0);
            if r.chance(0.4) {
                withdrew = Some((stop + r.range(0.0, 21.0) as usize).min(days - 1));
            }
            (0..days)
                .map(|d| if d < stop { -deficit } else { over })
                .collect()
        }
        Archetype::EarlyWithdrawal => {
            let w = r.range(10.0, 42.0) as usize;
            withdrew = Some(w);
            (0..days)
                .map(|d| {
                    if d < w {
                        -deficit
                    } else {
                        r.range(-100.0, 200.0)
                    }
                })
                .collect()
        }
        Archetype::Maintainer => vec![r.range(-200.0, 100.0); days],
    };

    // Walking: about half the people log walks (and do them).
    let walker = r.chance(0.5);
    let walk_p = r.range(0.2, 0.6);
    let walk_min = r.range(20.0, 50.0);
    // Weekend eating: extra share on Saturday and Sunday; day-to-day scatter.
    let weekend = r.range(0.0, 0.15);
    let scatter = r.range(0.05, 0.15);
    let underreport = r.range(0.0, sc.underreport_max);
    let log_p0 = r.range(0.4, 0.95);

    let mut body = Body {
        fat: fat0,
        lean: lean0,
        glycogen: G0,
        ecf: ecf0,
        at: 0.0,
    };
    let mut bw = Vec::with_capacity(days);
    let mut tissue = Vec::with_capacity(days);
    let mut intake = Vec::with_capacity(days);
    let mut tee = Vec::with_capacity(days);
    let mut walks = Vec::new();
    let mut logs = Vec::new();
    for (d, plan_d) in plan.iter().enumerate() {
        // Day 0 is a Monday; 5 and 6 are the weekend.
        let dow = d % 7;
        let wk = if dow >= 5 {
            1.0 + weekend
        } else {
            1.0 - weekend * 2.0 / 5.0
        };
        let day_factor = wk * (1.0 + r.gauss(0.0, scatter));
        let ei = ((ei0 + plan_d) * day_factor).max(300.0);
        let active = withdrew.is_none_or(|w| d < w);
        let walk_kcal = if walker && active && r.chance(walk_p) {
            let minutes = (walk_min * r.range(0.6, 1.4)).round();
            let met = 3.5;
            walks.push(Walk {
                day: d,
                minutes,
                met,
            });
            (met - 1.0) * phys.weight(&body) * minutes / 60.0
        } else {
            0.0
        };
        bw.push(phys.weight(&body));
        tissue.push(body.fat + body.lean);
        // Integrate the day in four explicit steps.
        let h = 0.25;
        let mut e_day = 0.0;
        for _ in 0..4 {
            let (k, e) = phys.rates(&body, ei, carb_frac, walk_kcal);
            e_day += e * h;
            body.fat = (body.fat + h * k[0]).max(1.0);
            body.lean += h * k[1];
            body.glycogen = (body.glycogen + h * k[2]).max(0.05);
            body.ecf += h * k[3];
            body.at += h * k[4];
        }
        intake.push(ei);
        tee.push(e_day);
        // Food log: logging fades over the program; weekends are logged less often.
        let p_log =
            log_p0 * (1.0 - 0.4 * d as f64 / days as f64) * if dow >= 5 { 0.7 } else { 1.0 };
        if active && r.chance(p_log) {
            let miss = (underreport + r.gauss(0.0, 0.08)).clamp(-0.2, 0.8);
            let as_logged = if sc.logs_keep_diet {
                ((ei0 + plan[0]) * day_factor).max(300.0)
            } else {
                ei
            };
            logs.push((d, (as_logged * (1.0 - miss)).round()));
        }
    }

    // Weigh-ins: weekly rhythm (Orsama et al. 2014, Obes Facts 7:36: highest after the weekend,
    // amplitude ≈0.35 % of body weight), AR(1) fluid scatter, clothed clinic visits.
    let amp = 0.0035 * bw0 * r.range(0.5, 1.5);
    let rhythm = [1.0, 0.5, 0.0, -0.5, -1.0, -0.5, 0.5];
    let phi = r.range(0.3, sc.phi_max);
    let marginal_sd = sc.noise * r.range(0.35, 0.9);
    let innov_sd = marginal_sd * (1.0 - phi * phi).sqrt();
    let clothes = r.range(sc.clothes.0, sc.clothes.1);
    let weigh_day = r.range(0.0, 7.0) as usize;
    let mut ar = r.gauss(0.0, marginal_sd);
    let mut obs = Vec::new();
    for (d, truth) in bw.iter().enumerate() {
        ar = phi * ar + r.gauss(0.0, innov_sd);
        if withdrew.is_some_and(|w| d >= w) {
            continue;
        }
        let fade = 1.0 - 0.35 * d as f64 / days as f64;
        let home = match weighing {
            Weighing::Daily => r.chance(0.9 * fade.max(0.8)),
            Weighing::Frequent => r.chance(0.5 * fade),
            Weighing::Weekly => d % 7 == weigh_day && r.chance(0.92),
            Weighing::Sporadic => r.chance(0.12 * fade),
            Weighing::ClinicOnly => false,
        };
        let clinic_every = if weighing == Weighing::ClinicOnly {
            14
        } else {
            28
        };
        let clinic = d % clinic_every == 3 && r.chance(0.9);
        let reading = truth + amp * rhythm[d % 7] + ar;
        if home {
            let gross = if r.chance(0.004) {
                r.gauss(0.0, 6.0)
            } else {
                0.0
            };
            obs.push(Obs {
                day: d,
                kg: ((reading + r.gauss(0.0, 0.1) + gross) * 10.0).round() / 10.0,
                source: "home-scale",
            });
        }
        if clinic {
            // Later in the day and clothed.
            obs.push(Obs {
                day: d,
                kg: ((reading + clothes + r.gauss(0.0, 0.2)) * 10.0).round() / 10.0,
                source: "clinic",
            });
        }
    }
    Person {
        index,
        male,
        age,
        height_cm,
        archetype,
        weighing,
        pal,
        rmr0,
        underreport,
        withdrew,
        bw,
        tissue,
        intake,
        tee,
        obs,
        logs,
        walks,
    }
}

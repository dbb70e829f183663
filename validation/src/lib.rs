//! Validation harness for cohortpress's estimates.
//!
//! [`truth`] simulates people whose truth is known (a richer model than the estimators, sharing
//! no code with them); [`run_person`] feeds what each person recorded through the real `trend`
//! and `energy` modules exactly as the runner does, and [`Summary`] scores the estimates
//! against the truth: interval coverage, errors, plateau onset, regain detection, plateau
//! causes and forecasts, overall and per archetype.

#![forbid(unsafe_code)]

pub mod rng;
pub mod truth;

use chrono::{Days, NaiveDate};
use cohortpress_metric_api::units::{Length, Mass};
use cohortpress_metric_api::view::{Interval, ModuleView};
use cohortpress_metric_api::{
    ActivityEntry, IntakeDay, MetricModule, ModuleContext, ModuleOutput, ParticipantData, Period,
    Profile, ProgramInfo, Sex, Targets, UnitSystem, WeighIn,
};
use cohortpress_metric_energy::EnergyModule;
use cohortpress_metric_energy::view::{EnergyView, OptionKind};
use cohortpress_metric_trend::TrendModule;
use cohortpress_metric_trend::view::{PeriodKind, RegainVerdict, Status, TrendView};
use std::collections::BTreeMap;
use truth::{Archetype, Person, Weighing};

/// First day of every simulated program (a Monday).
pub fn day0() -> NaiveDate {
    NaiveDate::from_ymd_opt(2027, 1, 4).expect("valid date")
}

fn date(d: usize) -> NaiveDate {
    day0()
        .checked_add_days(Days::new(d as u64))
        .expect("date in range")
}

fn day_of(d: NaiveDate) -> i64 {
    (d - day0()).num_days()
}

/// The participant data the modules see for a simulated person.
pub fn participant_data(p: &Person, targets: &Targets) -> ParticipantData {
    let profile = Profile {
        id: format!("SIM-{:04}", p.index),
        name: None,
        sex: Some(if p.male { Sex::Male } else { Sex::Female }),
        birth_date: None,
        age_years: p.age.floor(),
        height: Length::from_cm((p.height_cm * 10.0).round() / 10.0),
        enrolled: day0(),
        withdrew: p.withdrew.map(date),
        withdrawal_reason: Default::default(),
        groups: BTreeMap::new(),
        body_fat_percent: None,
        targets: targets.clone(),
        flags: vec![],
    };
    ParticipantData {
        profile,
        weights: p
            .obs
            .iter()
            .map(|o| WeighIn {
                date: date(o.day),
                time: None,
                weight: Mass::from_kg(o.kg),
                source: Some(o.source.to_string()),
            })
            .collect(),
        intake: p
            .logs
            .iter()
            .map(|(d, kcal)| IntakeDay {
                date: date(*d),
                kcal: *kcal,
                carbs_g: None,
                fat_g: None,
                protein_g: None,
                free_sugars_g: None,
            })
            .collect(),
        activity: p
            .walks
            .iter()
            .map(|w| ActivityEntry {
                date: date(w.day),
                activity: "walking".into(),
                minutes: w.minutes,
                met: w.met,
                met_source: "given in file".into(),
                steps: None,
            })
            .collect(),
        sessions: vec![],
        labs: vec![],
    }
}

/// Runs the `trend` then the `energy` module (default settings) for the 28-day period ending on
/// day `end`.
pub fn run_modules(
    data: &ParticipantData,
    days: usize,
    end: usize,
) -> (ModuleOutput, ModuleOutput) {
    run_modules_with(data, days, end, &serde_json::Value::Null)
}

/// What an oracle run tells the `energy` module of the simulated person's truth, through its
/// ordinary settings (a program could set them from measurements: activity by accelerometry or
/// doubly labelled water, reporting by a recovery biomarker). It shows how much of the error
/// comes from what the records cannot identify.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Oracle {
    /// Nothing: default settings.
    None,
    /// The person's true activity level (`base_pal`, `pal_sd` 0.01); resting energy still from
    /// the equation.
    Pal,
    /// The person's true under-reporting share (prior centre, SD 0.5 points).
    Underreporting,
}

impl Oracle {
    /// The `energy` settings for person `p`.
    pub fn energy_settings(self, p: &Person) -> serde_json::Value {
        match self {
            Oracle::None => serde_json::Value::Null,
            Oracle::Pal => serde_json::json!({"base_pal": p.pal, "pal_sd": 0.01}),
            Oracle::Underreporting => serde_json::json!({
                "underreporting_prior_percent": 100.0 * p.underreport,
                "underreporting_sd_percent": 0.5,
            }),
        }
    }
}

/// [`run_modules`] with `energy` settings `energy_settings` (JSON object, or null for the
/// defaults).
pub fn run_modules_with(
    data: &ParticipantData,
    days: usize,
    end: usize,
    energy_settings: &serde_json::Value,
) -> (ModuleOutput, ModuleOutput) {
    let program = ProgramInfo {
        id: "validation".into(),
        title: "Validation".into(),
        start: day0(),
        end: date(days - 1),
        units: UnitSystem::Metric,
        targets: Targets::default(),
    };
    let period = Period {
        from: date(end.saturating_sub(27)),
        to: date(end),
    };
    let mut ctx = ModuleContext {
        program,
        period,
        as_of: date(end),
        settings: TrendModule
            .spec()
            .resolve_settings(&serde_json::Value::Null)
            .expect("defaults resolve"),
        earlier: BTreeMap::new(),
    };
    let trend = TrendModule.compute(&ctx, data).expect("trend computes");
    ctx.settings = EnergyModule
        .spec()
        .resolve_settings(energy_settings)
        .expect("settings resolve");
    ctx.earlier.insert(TrendView::MODULE.into(), trend.clone());
    let energy = EnergyModule.compute(&ctx, data).expect("energy computes");
    (trend, energy)
}

fn mean(x: &[f64]) -> f64 {
    x.iter().sum::<f64>() / x.len() as f64
}

/// Plateau band half-width as a fraction of body weight per week (the programs' default,
/// ±0.25 %/week).
const BAND_PER_WEEK: f64 = 0.0025;

/// The true plateau onset: the first day after a loss of at least 3 % of baseline weight from
/// which the slope of the true tissue mass (centred over 14 days) stays inside ±0.25 % of body
/// weight per week for 28 days. `tissue` is the slow part of body weight (fat and lean tissue);
/// `bw` the whole weight, for the band and the loss.
pub fn true_plateau_onset(tissue: &[f64], bw: &[f64]) -> Option<usize> {
    plateau_onset_with_band(tissue, bw, BAND_PER_WEEK)
}

/// [`true_plateau_onset`] with another band half-width (fraction of weight per week); used only
/// to show how sensitive the scored onset is to the band (a slope that approaches the band edge
/// slowly crosses it at a poorly defined day).
pub fn plateau_onset_with_band(tissue: &[f64], bw: &[f64], band_per_week: f64) -> Option<usize> {
    let n = tissue.len();
    let shift = bw[0] - tissue[0];
    let smooth: Vec<f64> = tissue.iter().map(|x| x + shift).collect();
    let slope = |t: usize| -> Option<f64> {
        (t >= 7 && t + 7 < n - 3).then(|| (smooth[t + 7] - smooth[t - 7]) / 14.0)
    };
    let mut run_min = f64::INFINITY;
    for t in 0..n {
        run_min = run_min.min(smooth[t]);
        if smooth[0] - run_min < 0.03 * bw[0] {
            continue;
        }
        let ok = (t..t + 28).all(|u| {
            slope(u).is_some_and(|s| s.abs() <= band_per_week * smooth[u.min(n - 1)] / 7.0)
        });
        if ok {
            return Some(t);
        }
    }
    None
}

/// Whether a true onset `t` is ill-conditioned: it moves by more than 14 days (or disappears)
/// when the band is 0.20 or 0.30 % of weight per week instead of 0.25. A slope error of
/// 0.05 %/week (about 0.04 kg/week) is far below what four weeks of home weigh-ins resolve, so
/// for these onsets the ±14-day criterion asks for more than the data hold.
pub fn onset_ill_conditioned(tissue: &[f64], bw: &[f64], t: usize) -> bool {
    let moved = |o: Option<usize>| o.is_none_or(|o| o.abs_diff(t) > 14);
    moved(plateau_onset_with_band(tissue, bw, BAND_PER_WEEK - 0.0005))
        || moved(plateau_onset_with_band(tissue, bw, BAND_PER_WEEK + 0.0005))
}

/// Everything scored for one person.
#[derive(Debug, Clone)]
pub struct Outcome {
    /// The person's archetype.
    pub archetype: Archetype,
    /// Weighing habit.
    pub weighing: Weighing,
    /// Implied intake, last 28 days: (truth, estimate, lower, upper).
    pub intake: Option<(f64, f64, f64, f64)>,
    /// Under-reporting, %: (truth, estimate).
    pub underreport: Option<(f64, f64)>,
    /// Total expenditure, last 28 days: (truth, estimate, lower, upper).
    pub tdee: Option<(f64, f64, f64, f64)>,
    /// Trend weight at the last weigh-in: (truth, estimate).
    pub trend_weight: Option<(f64, f64)>,
    /// True plateau onset (observable ones only) and the estimated onset.
    pub plateau: Option<(usize, Option<i64>)>,
    /// For a scored true onset: whether it is ill-conditioned ([`onset_ill_conditioned`]).
    pub plateau_ill_conditioned: Option<bool>,
    /// No true plateau (and observed to the end): whether one was reported anyway.
    pub false_plateau: Option<bool>,
    /// Regain truth (true = regaining, false = clearly not) and whether it was reported.
    pub regain: Option<(bool, bool)>,
    /// The status at days 60, 120 and the end (each with a weigh-in in its last 28 days): the
    /// least-squares slope of the true body weight over those 28 days (kg/d), the plateau band δ there (kg/d)
    /// and the status reported.
    pub status: Vec<(f64, f64, Status)>,
    /// Plateau cause: (true cause, estimated classification) for matched plateaus.
    pub cause: Option<(&'static str, String)>,
    /// Forecast from mid-program to the end: (truth, lower, upper).
    pub forecast: Option<(f64, f64, f64)>,
    /// Options at the end that cut intake and are called safe: whether each leaves the true
    /// intake (the mean of the last 28 days, less the cut) at or above the module's floor.
    pub cuts_called_safe: Vec<bool>,
    /// Whether anything reported at the end lies outside what a body can do: a steady state or
    /// forecast (value or band edge) below BMI 16, or a negative bound of the implied intake,
    /// total expenditure, steady state or forecast.
    pub impossible: bool,
}

/// Simulates and scores person `index` of the cohort with seed `seed` over `days` days.
pub fn run_person(seed: u64, index: usize, days: usize) -> Outcome {
    run_person_with(seed, index, days, Oracle::None)
}

/// [`run_person`] with what `oracle` tells the `energy` module.
pub fn run_person_with(seed: u64, index: usize, days: usize, oracle: Oracle) -> Outcome {
    run_person_in(seed, index, days, oracle, &truth::Scenario::BASE)
}

/// [`run_person_with`] for a person simulated in scenario `sc`.
pub fn run_person_in(
    seed: u64,
    index: usize,
    days: usize,
    oracle: Oracle,
    sc: &truth::Scenario,
) -> Outcome {
    let p = truth::simulate_in(seed, index, days, sc);
    let data = participant_data(&p, &Targets::default());
    let end = days - 1;
    let settings = oracle.energy_settings(&p);
    let (trend, energy) = run_modules_with(&data, days, end, &settings);
    let trend = TrendView::from_output(&trend).expect("the trend output reads as its view");
    let energy = EnergyView::from_output(&energy).expect("the energy output reads as its view");
    let last_obs = p.obs.iter().map(|o| o.day).max();
    let observed_to_end = last_obs.is_some_and(|d| d + 28 > end);

    let intake_truth = mean(&p.intake[end - 27..=end]);
    let i = energy.implied_intake_kcal_per_day;
    let intake = i
        .value
        .and_then(|v| Some((intake_truth, v, i.lower?, i.upper?)));
    let logged = energy.logged_intake_kcal_per_day.value;
    let underreport = energy
        .underreporting_percent
        .value
        .or_else(|| {
            let (i, l) = (intake?.1, logged?);
            Some(100.0 * (1.0 - l / i))
        })
        .filter(|_| logged.is_some() && intake.is_some())
        .map(|e| (100.0 * p.underreport, e));
    let tdee = match energy.tdee_kcal_per_day {
        Interval {
            value: Some(e),
            lower: Some(l),
            upper: Some(u),
        } if observed_to_end => Some((mean(&p.tee[end - 27..=end]), e, l, u)),
        _ => None,
    };
    let trend_weight = match (trend.current_weight_kg.value, last_obs) {
        (Some(e), Some(d)) => Some((p.bw[d], e)),
        _ => None,
    };

    // Plateaus.
    let onset = true_plateau_onset(&p.tissue, &p.bw);
    let est_onset = trend
        .periods
        .iter()
        .find(|r| r.kind == PeriodKind::Plateau)
        .map(|r| day_of(r.start));
    let observable = |t: usize| p.withdrew.is_none_or(|w| w >= t + 28);
    let plateau = onset.filter(|t| observable(*t)).map(|t| (t, est_onset));
    let plateau_ill_conditioned = plateau.map(|(t, _)| onset_ill_conditioned(&p.tissue, &p.bw, t));
    let false_plateau =
        (onset.is_none() && observed_to_end && p.withdrew.is_none()).then_some(est_onset.is_some());

    // Cause of a matched plateau.
    let cause = match (plateau, est_onset) {
        (Some((t, _)), Some(e)) if (e - t as i64).abs() <= 14 => {
            let early = mean(&p.intake[7..35]);
            let during = mean(&p.intake[t..(t + 28).min(days)]);
            let rise = during - early;
            let truth = if rise >= 150.0 {
                Some("intake_drift")
            } else if rise < 75.0 {
                Some("expected_slowdown")
            } else {
                None
            };
            let est = energy
                .plateau_assessment
                .iter()
                .find(|r| day_of(r.start) == e)
                .map_or_else(|| "none".into(), |r| r.classification.as_str().to_string());
            truth.map(|t| (t, est))
        }
        _ => None,
    };

    // Regain at the end: the true level now against its lowest point.
    let regain = observed_to_end
        .then(|| {
            let n = p.tissue.len();
            let rise_now = p.tissue[n - 1];
            let min = p.tissue.iter().copied().fold(f64::INFINITY, f64::min);
            let rise = rise_now - min;
            let lost = p.tissue[0] - min >= 0.03 * p.bw[0];
            let truth = if lost && rise >= 0.02 * p.bw[0] {
                Some(true)
            } else if rise < 0.005 * p.bw[0] {
                Some(false)
            } else {
                None
            };
            let said = trend
                .regain_verdict
                .map_or(trend.status == Status::Regaining, |v| {
                    v == RegainVerdict::Regaining
                });
            truth.map(|t| (t, said))
        })
        .flatten();

    // The status at days 60, 120 and the end, for each that has a weigh-in in its last 28 days,
    // against the least-squares slope of the true body weight over those 28 days (not its two
    // ends: a day's glycogen and water move with that day's intake by a few hundred grams). The band is the `trend`
    // module's default, 0.25 % of the weight a week, which the harness does not change. With
    // `--days 120` the end is day 120 itself, scored once (the days are in order: the harness
    // needs at least 120).
    let mut checked = vec![59, 119, end];
    checked.dedup();
    let status = checked
        .into_iter()
        .filter(|&c| c <= end && p.obs.iter().any(|o| o.day <= c && o.day + 28 > c))
        .map(|c| {
            let said = if c == end {
                trend.status
            } else {
                let (t, _) = run_modules_with(&data, days, c, &settings);
                TrendView::from_output(&t)
                    .expect("the trend output reads as its view")
                    .status
            };
            let slope = ols_slope(&p.bw[c - 27..=c]);
            let delta = 0.25 / 100.0 * p.bw[c] / 7.0;
            (slope, delta, said)
        })
        .collect();

    // Options that cut intake and are called safe, against the true intake. The floors are the
    // `energy` module's defaults (`intake_floor_female` 1,200, `intake_floor_male` 1,500 kcal/d),
    // which the harness does not change.
    let floor = if p.male { 1500.0 } else { 1200.0 };
    let cuts_called_safe = i
        .value
        .map(|implied| {
            energy
                .options
                .iter()
                .filter(|o| o.feasible)
                .filter_map(|o| {
                    let cut = match o.kind {
                        OptionKind::Intake => -o.change_per_day?,
                        OptionKind::Combined => implied - o.resulting_intake_kcal_per_day?,
                        OptionKind::Walking => return None,
                    };
                    (cut > 0.0).then_some(intake_truth - cut >= floor)
                })
                .collect()
        })
        .unwrap_or_default();

    // Figures outside what a body can do.
    let min_kg = 16.0 * (p.height_cm / 100.0).powi(2);
    let ss = &energy.steady_state_weight_kg;
    let weights = [ss.value, ss.lower, ss.upper].into_iter().flatten().chain(
        energy
            .forecast_weight
            .points
            .iter()
            .flat_map(|pt| [Some(pt.value), pt.lower, pt.upper])
            .flatten(),
    );
    let bounds = [i.lower, energy.tdee_kcal_per_day.lower, ss.lower]
        .into_iter()
        .flatten();
    let impossible = weights.clone().any(|w| w < min_kg) || bounds.chain(weights).any(|x| x < 0.0);

    // Forecast from mid-program.
    let mid = days / 2 - 1;
    let (_, energy_mid) = run_modules_with(&data, days, mid, &settings);
    let energy_mid =
        EnergyView::from_output(&energy_mid).expect("the energy output reads as its view");
    let forecast = Some(&energy_mid.forecast_weight).and_then(|s| {
        let pt = s.points.iter().find(|pt| pt.date == date(end))?;
        Some((p.bw[end], pt.lower?, pt.upper?))
    });

    Outcome {
        archetype: p.archetype,
        weighing: p.weighing,
        intake,
        underreport,
        tdee,
        trend_weight,
        plateau,
        plateau_ill_conditioned,
        false_plateau,
        regain,
        status,
        cause,
        forecast,
        cuts_called_safe,
        impossible,
    }
}

/// Runs a whole cohort (on up to `threads` threads; the result does not depend on them).
pub fn run_cohort(seed: u64, participants: usize, days: usize, threads: usize) -> Vec<Outcome> {
    run_cohort_with(seed, participants, days, threads, Oracle::None)
}

/// [`run_cohort`] with what `oracle` tells the `energy` module.
pub fn run_cohort_with(
    seed: u64,
    participants: usize,
    days: usize,
    threads: usize,
    oracle: Oracle,
) -> Vec<Outcome> {
    run_cohort_in(
        seed,
        participants,
        days,
        threads,
        oracle,
        &truth::Scenario::BASE,
    )
}

/// [`run_cohort_with`] for a cohort simulated in scenario `sc`.
pub fn run_cohort_in(
    seed: u64,
    participants: usize,
    days: usize,
    threads: usize,
    oracle: Oracle,
    sc: &truth::Scenario,
) -> Vec<Outcome> {
    assert!(days >= 120, "the harness needs at least 120 days");
    let threads = threads.clamp(1, 64);
    let mut out: Vec<Option<Outcome>> = vec![None; participants];
    std::thread::scope(|s| {
        for (k, chunk) in out
            .chunks_mut(participants.div_ceil(threads).max(1))
            .enumerate()
        {
            let base = k * participants.div_ceil(threads).max(1);
            s.spawn(move || {
                for (j, slot) in chunk.iter_mut().enumerate() {
                    *slot = Some(run_person_in(seed, base + j, days, oracle, sc));
                }
            });
        }
    });
    out.into_iter()
        .map(|o| o.expect("every person ran"))
        .collect()
}

fn median(mut x: Vec<f64>) -> Option<f64> {
    if x.is_empty() {
        return None;
    }
    x.sort_by(|a, b| a.total_cmp(b));
    let n = x.len();
    Some(if n % 2 == 1 {
        x[n / 2]
    } else {
        0.5 * (x[n / 2 - 1] + x[n / 2])
    })
}

/// One scored quantity: its value and the number of people it rests on.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Figure {
    /// Value (a proportion 0–1, or a median in the quantity's unit), `None` when no one counted.
    pub value: Option<f64>,
    /// People counted.
    pub n: usize,
}

fn prop(hits: impl Iterator<Item = bool>) -> Figure {
    let (mut k, mut n) = (0, 0);
    for h in hits {
        n += 1;
        k += usize::from(h);
    }
    Figure {
        value: (n > 0).then(|| k as f64 / n as f64),
        n,
    }
}

fn med(x: Vec<f64>) -> Figure {
    Figure {
        n: x.len(),
        value: median(x),
    }
}

/// The scored table for a set of outcomes.
#[derive(Debug, Clone, PartialEq)]
pub struct Summary {
    /// Share of implied-intake 95 % intervals (last 28 days) that contain the true mean intake.
    pub intake_coverage: Figure,
    /// Median error of the implied intake (estimate − truth), kcal/d.
    pub intake_median_error: Figure,
    /// Median half-width of the implied-intake interval, kcal/d.
    pub intake_half_width: Figure,
    /// Median absolute error of under-reporting, percentage points.
    pub underreport_mae: Figure,
    /// Median error of under-reporting (estimate − truth), points.
    pub underreport_bias: Figure,
    /// Share of true plateaus whose onset was found within ±14 days.
    pub plateau_onset_14: Figure,
    /// Share of scored true onsets that are ill-conditioned ([`onset_ill_conditioned`]).
    pub plateau_ill_conditioned: Figure,
    /// Share of well-conditioned true onsets found within ±14 days.
    pub plateau_onset_14_well: Figure,
    /// Median onset delay of found plateaus (estimate − truth), days.
    pub plateau_delay: Figure,
    /// Share of people without a true plateau who were given one.
    pub plateau_false: Figure,
    /// Regain sensitivity.
    pub regain_sensitivity: Figure,
    /// Regain specificity.
    pub regain_specificity: Figure,
    /// Share of statuses at days 60, 120 and the end (each with a weigh-in in its last 28 days)
    /// that give a verdict (losing, plateau, stable
    /// or regaining; not `unclear` or `insufficient_data`).
    pub status_verdict: Figure,
    /// The same for people whose true weight moved by more than twice the plateau band.
    pub status_verdict_moving: Figure,
    /// Share of those verdicts the true weight change contradicts ([`status_contradicted`]).
    pub status_wrong: Figure,
    /// Share of matched plateaus whose cause was classified correctly.
    pub cause_correct: Figure,
    /// Share of matched plateaus left "undetermined".
    pub cause_undetermined: Figure,
    /// Share of matched plateaus given the wrong decided cause (drift for a slowdown or the
    /// reverse; "undetermined" is not wrong).
    pub cause_wrong: Figure,
    /// Share of forecasts (day 90 → 180) whose band contains the true weight.
    pub forecast_coverage: Figure,
    /// Median absolute error of total expenditure, kcal/d.
    pub tdee_mae: Figure,
    /// Share of total-expenditure 95 % intervals that contain the truth.
    pub tdee_coverage: Figure,
    /// Median absolute error of the trend weight at the last weigh-in, kg.
    pub trend_mae: Figure,
    /// Median error of the trend weight, kg.
    pub trend_bias: Figure,
    /// Share of intake cuts called safe that would take the true intake below the floor.
    pub cuts_below_floor: Figure,
    /// Share of people with a figure outside what a body can do ([`Outcome::impossible`]).
    pub impossible: Figure,
}

impl Summary {
    /// Scores `outcomes`.
    pub fn of<'a>(outcomes: impl IntoIterator<Item = &'a Outcome> + Clone) -> Self {
        let o = || outcomes.clone().into_iter();
        Summary {
            intake_coverage: prop(
                o().filter_map(|x| x.intake)
                    .map(|(t, _, l, u)| l <= t && t <= u),
            ),
            intake_median_error: med(o()
                .filter_map(|x| x.intake)
                .map(|(t, e, _, _)| e - t)
                .collect()),
            intake_half_width: med(o()
                .filter_map(|x| x.intake)
                .map(|(_, _, l, u)| (u - l) / 2.0)
                .collect()),
            underreport_mae: med(o()
                .filter_map(|x| x.underreport)
                .map(|(t, e)| (e - t).abs())
                .collect()),
            underreport_bias: med(o()
                .filter_map(|x| x.underreport)
                .map(|(t, e)| e - t)
                .collect()),
            plateau_onset_14: prop(
                o().filter_map(|x| x.plateau)
                    .map(|(t, e)| e.is_some_and(|e| (e - t as i64).abs() <= 14)),
            ),
            plateau_ill_conditioned: prop(o().filter_map(|x| x.plateau_ill_conditioned)),
            plateau_onset_14_well: prop(
                o().filter(|x| x.plateau_ill_conditioned == Some(false))
                    .filter_map(|x| x.plateau)
                    .map(|(t, e)| e.is_some_and(|e| (e - t as i64).abs() <= 14)),
            ),
            plateau_delay: med(o()
                .filter_map(|x| x.plateau)
                .filter_map(|(t, e)| Some((e? - t as i64) as f64))
                .collect()),
            plateau_false: prop(o().filter_map(|x| x.false_plateau)),
            regain_sensitivity: prop(o().filter_map(|x| x.regain).filter(|r| r.0).map(|r| r.1)),
            regain_specificity: prop(o().filter_map(|x| x.regain).filter(|r| !r.0).map(|r| !r.1)),
            status_verdict: prop(
                o().flat_map(|x| x.status.iter().copied())
                    .map(|(_, _, s)| gives_verdict(s)),
            ),
            status_verdict_moving: prop(
                o().flat_map(|x| x.status.iter().copied())
                    .filter(|&(t, d, _)| t.abs() > 2.0 * d)
                    .map(|(_, _, s)| gives_verdict(s)),
            ),
            status_wrong: prop(
                o().flat_map(|x| x.status.iter().copied())
                    .filter(|&(_, _, s)| gives_verdict(s))
                    .map(|(t, d, s)| status_contradicted(s, t, d)),
            ),
            cause_correct: prop(o().filter_map(|x| x.cause.clone()).map(|(t, e)| t == e)),
            cause_undetermined: prop(
                o().filter_map(|x| x.cause.clone())
                    .map(|(_, e)| e == "undetermined"),
            ),
            cause_wrong: prop(
                o().filter_map(|x| x.cause.clone())
                    .map(|(t, e)| e != t && e != "undetermined"),
            ),
            forecast_coverage: prop(
                o().filter_map(|x| x.forecast)
                    .map(|(t, l, u)| l <= t && t <= u),
            ),
            tdee_mae: med(o()
                .filter_map(|x| x.tdee)
                .map(|(t, e, _, _)| (e - t).abs())
                .collect()),
            tdee_coverage: prop(
                o().filter_map(|x| x.tdee)
                    .map(|(t, _, l, u)| l <= t && t <= u),
            ),
            trend_mae: med(o()
                .filter_map(|x| x.trend_weight)
                .map(|(t, e)| (e - t).abs())
                .collect()),
            trend_bias: med(o()
                .filter_map(|x| x.trend_weight)
                .map(|(t, e)| e - t)
                .collect()),
            cuts_below_floor: prop(o().flat_map(|x| x.cuts_called_safe.iter().map(|ok| !ok))),
            impossible: prop(o().map(|x| x.impossible)),
        }
    }
}

/// Least-squares slope of `y` against its index (per day).
fn ols_slope(y: &[f64]) -> f64 {
    let n = y.len() as f64;
    let tm = (n - 1.0) / 2.0;
    let ym = y.iter().sum::<f64>() / n;
    let (sxy, sxx) = y.iter().enumerate().fold((0.0, 0.0), |(a, b), (i, v)| {
        let dt = i as f64 - tm;
        (a + dt * (v - ym), b + dt * dt)
    });
    sxy / sxx
}

/// Whether a status is a verdict on the last weeks' direction.
fn gives_verdict(s: Status) -> bool {
    matches!(
        s,
        Status::Losing | Status::Plateau | Status::Stable | Status::Regaining
    )
}

/// Whether the true mean slope `t` (kg/d) contradicts status `s`, with `d` the plateau band: a
/// loss while the weight did not fall, a rise while it did not rise, a plateau or steady weight
/// while it moved by more than twice the band.
pub fn status_contradicted(s: Status, t: f64, d: f64) -> bool {
    match s {
        Status::Losing => t >= 0.0,
        Status::Regaining => t <= 0.0,
        Status::Plateau | Status::Stable => t.abs() > 2.0 * d,
        Status::Unclear | Status::InsufficientData => false,
    }
}

/// A goal of the table: (label, the figure, goal text, whether met, how to print the value).
pub struct Row {
    /// What is measured.
    pub label: &'static str,
    /// Goal, as text.
    pub goal: &'static str,
    /// Pick the figure from a summary.
    pub pick: fn(&Summary) -> Figure,
    /// Whether a value meets the goal (`None`: no goal).
    pub met: Option<fn(f64) -> bool>,
    /// Percent (true) or a plain number.
    pub percent: bool,
}

/// The rows of the validation table.
pub fn rows() -> Vec<Row> {
    vec![
        Row {
            label: "implied intake (last 28 d): 95 % interval contains the truth",
            goal: "≥ 90 %",
            pick: |s| s.intake_coverage,
            met: Some(|v| v >= 0.90),
            percent: true,
        },
        Row {
            label: "implied intake: median error, kcal/d",
            goal: "—",
            pick: |s| s.intake_median_error,
            met: None,
            percent: false,
        },
        Row {
            label: "implied intake: median interval half-width, kcal/d",
            goal: "—",
            pick: |s| s.intake_half_width,
            met: None,
            percent: false,
        },
        Row {
            label: "under-reporting %: median absolute error, points",
            goal: "≤ 5",
            pick: |s| s.underreport_mae,
            met: Some(|v| v <= 5.0),
            percent: false,
        },
        Row {
            label: "under-reporting %: median error, points",
            goal: "—",
            pick: |s| s.underreport_bias,
            met: None,
            percent: false,
        },
        Row {
            label: "plateau onset within ±14 d of the true onset",
            goal: "≥ 80 %",
            pick: |s| s.plateau_onset_14,
            met: Some(|v| v >= 0.80),
            percent: true,
        },
        Row {
            label: "true plateau onsets that move > 14 d when the band is 0.20 or 0.30 %/wk",
            goal: "—",
            pick: |s| s.plateau_ill_conditioned,
            met: None,
            percent: true,
        },
        Row {
            label: "plateau onset within ±14 d, onsets that do not move so",
            goal: "—",
            pick: |s| s.plateau_onset_14_well,
            met: None,
            percent: true,
        },
        Row {
            label: "plateau onset: median delay of found plateaus, d",
            goal: "—",
            pick: |s| s.plateau_delay,
            met: None,
            percent: false,
        },
        Row {
            label: "plateau reported without a true plateau",
            goal: "—",
            pick: |s| s.plateau_false,
            met: None,
            percent: true,
        },
        Row {
            label: "regain: sensitivity",
            goal: "≥ 80 %",
            pick: |s| s.regain_sensitivity,
            met: Some(|v| v >= 0.80),
            percent: true,
        },
        Row {
            label: "regain: specificity",
            goal: "≥ 95 %",
            pick: |s| s.regain_specificity,
            met: Some(|v| v >= 0.95),
            percent: true,
        },
        Row {
            label: "status at days 60, 120, 180: a verdict (losing, plateau, stable or regaining)",
            goal: "—",
            pick: |s| s.status_verdict,
            met: None,
            percent: true,
        },
        Row {
            label: "status, weight moving by more than twice the plateau band: a verdict",
            goal: "—",
            pick: |s| s.status_verdict_moving,
            met: None,
            percent: true,
        },
        Row {
            label: "status: verdicts the true weight change contradicts",
            goal: "—",
            pick: |s| s.status_wrong,
            met: None,
            percent: true,
        },
        Row {
            label: "plateau cause correct (matched plateaus)",
            goal: "≥ 80 %",
            pick: |s| s.cause_correct,
            met: Some(|v| v >= 0.80),
            percent: true,
        },
        Row {
            label: "plateau cause left undetermined",
            goal: "—",
            pick: |s| s.cause_undetermined,
            met: None,
            percent: true,
        },
        Row {
            label: "plateau cause decided wrongly",
            goal: "—",
            pick: |s| s.cause_wrong,
            met: None,
            percent: true,
        },
        Row {
            label: "forecast day 90 → 180: band contains the true weight",
            goal: "≥ 90 %",
            pick: |s| s.forecast_coverage,
            met: Some(|v| v >= 0.90),
            percent: true,
        },
        Row {
            label: "total expenditure (last 28 d): median absolute error, kcal/d",
            goal: "≤ 150",
            pick: |s| s.tdee_mae,
            met: Some(|v| v <= 150.0),
            percent: false,
        },
        Row {
            label: "total expenditure: 95 % interval contains the truth",
            goal: "—",
            pick: |s| s.tdee_coverage,
            met: None,
            percent: true,
        },
        Row {
            label: "intake cuts called safe that take the true intake below the floor",
            goal: "—",
            pick: |s| s.cuts_below_floor,
            met: None,
            percent: true,
        },
        Row {
            label: "a steady state or forecast below BMI 16, or a negative bound",
            goal: "—",
            pick: |s| s.impossible,
            met: None,
            percent: true,
        },
        Row {
            label: "trend weight at the last weigh-in: median absolute error, kg",
            goal: "—",
            pick: |s| s.trend_mae,
            met: None,
            percent: false,
        },
        Row {
            label: "trend weight: median error, kg",
            goal: "—",
            pick: |s| s.trend_bias,
            met: None,
            percent: false,
        },
    ]
}

/// Formats a figure.
pub fn fmt_figure(f: Figure, percent: bool) -> String {
    match f.value {
        None => format!("– (n={})", f.n),
        Some(v) if percent => format!("{:.1} % (n={})", 100.0 * v, f.n),
        Some(v) => format!("{v:.1} (n={})", f.n),
    }
}

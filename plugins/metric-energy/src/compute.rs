//! What [`crate::EnergyModule::compute`] does with one participant's data and the `trend`
//! module's output.
//!
//! Definitions used throughout (the report and the tidy outputs rely on them):
//!
//! - **Baseline**: body weight BW₀ = the trend level on the first trend day (else the first
//!   weigh-in); age at enrolment; body fat from the profile (`measured`) or Jackson et al. 2002
//!   (`jackson_2002`); RMR₀ by the chosen equation; maintenance intake EI₀ = RMR₀ × `base_pal`.
//!   Logged exercise is treated as *added* by the program on top of `base_pal`.
//! - **Expenditure** (static): TDEE = RMR(current weight, current age) × PAL + net
//!   activity (MET − 1)·kg·h per day, PAL the person's activity level after the food logs and
//!   the weight trend (the prior `base_pal` without them); the weekly table's expenditure is
//!   this, week by week. Net, because the PAL already counts resting energy for
//!   those minutes.
//! - **Implied intake** (Hall & Chow 2011): EI = EI₀ + ε·(BW − BW₀) + ρ·dBW/dt + A/(1 − β),
//!   with BW the mean trend level and dBW/dt the mean trend slope over the last `window_days` of
//!   the period, A the net activity (kcal/d) over the same window; being linear, this is the
//!   mean intake over the window. The A/(1 − β) term is the
//!   same model's answer for exercise: in Hall et al. 2011 the thermic effect and adaptive
//!   thermogenesis (β = 0.24 together) follow intake, not exercise. The 95 % interval comes from
//!   the slope's interval (the mean of the daily slope bounds, which is conservative).
//! - **Gap** = implied − logged: positive means more was eaten than logged.
//! - **Energy balance** = implied intake − TDEE.
//! - **Forecast**: the Hall model started at the current trend weight (adaptive thermogenesis
//!   settled) and run to program end with the implied intake and current activity held; the band
//!   uses the intake interval's ends. The steady state is where that run comes to rest.

use crate::dynamics::{BETA_AT, BETA_TEF, HallModel, LinearisedModel};
use crate::equations::{RestingEquation, activity_kcal_net, jackson_2002_body_fat};
use crate::view::{
    BodyFatSource, EnergyFlag, OPTIONS_LABEL, OptionKind, OptionRow, PLATEAU_ASSESSMENT_LABEL,
    PlateauCause, PlateauRow, WEEKLY_ENERGY_LABEL, WeekEnergyRow, names,
};
use baseline::{Baseline, baseline_requirement};
use chrono::Datelike as _;
use chrono::{Days, NaiveDate};
use cohortpress_metric_api::view::{ModuleView, TableRow};
use cohortpress_metric_api::{
    FlagSeverity, ModuleContext, ModuleError, ModuleOutput, ParticipantData, Point, Series, Sex,
    Table,
};
use cohortpress_metric_trend::view::{PeriodKind, TrendView};
use std::collections::BTreeMap;

/// The profile flag that notes a pregnancy (README, profile.yaml `flags`; the `outcomes`
/// module raises its clinical `pregnancy` flag from the same word).
const PREGNANCY_FLAG: &str = "pregnant";

/// The profile flag that notes breastfeeding (profile.yaml `flags`, also written `breast
/// feeding` or `lactating`; the `outcomes` module raises its clinical `breastfeeding` flag from
/// the same word).
const BREASTFEEDING_FLAG: &str = "breastfeeding";

/// β = β_TEF + β_AT: the part of an intake change the body gives back (Hall et al. 2011).
const BETA: f64 = BETA_TEF + BETA_AT;
/// z quantile of the standard normal for a two-sided 95 % interval.
const Z_95: f64 = 1.959_963_984_540_054;
/// Logged days needed for a mean logged intake (program choice, as the outcomes module's
/// `MIN_INTAKE_DAYS`).
const MIN_LOGGED_DAYS: usize = 4;
/// Gap beyond which (whole 95 % interval) logs are called inconsistent with the trend, kcal/d.
const GAP_FLAG_KCAL: f64 = 300.0;
/// Default walking cap of the options table, min/d (setting `max_walk_minutes`; common
/// practice: an hour a day is already 420 minutes a week, well past the WHO 2020 range of
/// 150–300). The program passes its `guidance.max_walk_minutes` here, so the tidy options and
/// the report's guidance call the same walks feasible.
pub(crate) const MAX_WALK_MIN: f64 = 60.0;
/// Half-width of the plateau band as a fraction of body weight per week (program
/// configuration rather than a literature constant: no published plateau definition exists).
const PLATEAU_BAND_FRACTION_PER_WEEK: f64 = 0.0025;
/// Default SD of a person's physical activity level around `base_pal` (setting `pal_sd`):
/// FAO/WHO/UNU 2004 (*Human energy requirements*) puts sedentary-to-light lifestyles at PAL
/// 1.40–1.69 and active ones at 1.70–1.99. People spread evenly over those two categories alone
/// have an SD of 0.6/√12 ≈ 0.17, so a prior SD of 0.15 was narrower than the population it
/// stands for; 0.20 puts ±2 SD at 1.2–2.0, from about the least active free-living adults
/// (PAL ≈ 1.2, from memory) to the top of the active category (program choice). Measured
/// (VALIDATION.md, seed 20261202): the implied intake's 95 % interval held the truth for
/// 97.6 % (was 94.8 %), 93.5 % (was 87.9 %) when activity levels spread over 1.2–2.2, at
/// intervals about 8 % wider.
pub(crate) const PAL_SD: f64 = 0.20;
/// Relative SD of measured resting energy around the equation's prediction: Mifflin–St Jeor
/// predicts within ±10 % for more adults than any other equation (Frankenfield et al. 2005, J Am
/// Diet Assoc 105:775, a systematic review); for about 80 % of them (from memory), i.e. SD ≈ 8 %.
const RMR_REL_SD: f64 = 0.08;
/// Default prior share of intake left out of food logs, and its SD (settings
/// `underreporting_prior_percent`, `underreporting_sd_percent`): self-reported intake falls
/// short of doubly-labelled-water expenditure in every kind of self-report instrument
/// (Trabulsi & Schoeller 2001, Am J Physiol Endocrinol Metab 281:E891, a review of such
/// studies), by 10–45 % in most of them (range from memory), centre 20 %, SD 12 points.
pub(crate) const UNDERREPORT_PRIOR: f64 = 0.20;
pub(crate) const UNDERREPORT_SD: f64 = 0.12;
/// Relative SDs of the linearised model's ρ (energy density of weight change; with body fat
/// unknown to ±4 points the lean share of a change moves by about ±10 %) and ε (the
/// expenditure slope, through the unknown activity level); program choice.
const RHO_REL_SD: f64 = 0.10;
const EPS_REL_SD: f64 = 0.15;
/// How fast a person's intake may move after the last data, kcal/d per day, for the forecast
/// band (≈ 270 kcal/d over a quarter; adherence commonly fades over months, Thomas et al. 2014,
/// Am J Clin Nutr 100:787). Program choice; the person's own movement so far is added to it.
const INTAKE_DRIFT_PER_DAY: f64 = 3.0;
/// Share of the current deficit the forecast band's upper edge allows to be given up by the end
/// of the horizon (program choice; see the forecast in `run`): all of it, i.e. the upper edge
/// allows a return to the baseline requirement — a full relapse — by the horizon's end. With
/// half (the earlier choice) the band held the true weight for 75 % of the simulated people who
/// stop and regain; with all of it, 85 % (seed 20261202; 92.5 → 96.2 % over everyone;
/// VALIDATION.md).
const FADE_SHARE: f64 = 1.0;
/// Default of `max_sustained_intake_x_rmr`: the most energy a person can take in and absorb,
/// sustained over weeks, as a multiple of resting energy: the alimentary limit on sustained energy budgets, about 2.5 × BMR for efforts of
/// weeks or more (Thurber et al. 2019, "Extreme events reveal an alimentary limit on sustained
/// maximal human energy expenditure", Sci Adv 5:eaaw0341: ~2.5 × BMR from overfeeding and
/// endurance data). An implied intake
/// above it is a rise the gut could not have supplied: a step in the weigh-ins (another scale,
/// clothing, a typing error) or fluid, not tissue. Applied to the 28-day window and, as a
/// program choice, to each week of the weekly table (a week's implied intake is read off the
/// smoothed trend, so it is no single feast either).
pub(crate) const MAX_SUSTAINED_INTAKE_X_RMR: f64 = 2.5;
/// Default of `very_low_implied_intake`, kcal/d: a very-low-calorie diet is 800 kcal a day or
/// less and is used only under medical supervision (NIH/NHLBI 1998 Clinical Guidelines; from
/// memory; the outcomes module's `very_low_intake` for logged intake has the same default).
/// An implied intake below it is either a supervised-diet intake in a program that is not one,
/// or a fall the weigh-ins cannot carry (a step, fluid): in both cases not a figure to print
/// for the participant, and a matter for a licensed clinician. Applied to the central value,
/// the figure a report would print (an interval whose upper bound is below it has its centre
/// below it too).
pub(crate) const VERY_LOW_IMPLIED_INTAKE: f64 = 800.0;
/// Smallest BMI a reported steady state or forecast may reach: the linearised energy balance
/// is not a model of starvation (program choice; BMI 16 is the WHO threshold of severe
/// thinness).
const MIN_STEADY_STATE_BMI: f64 = 16.0;
/// Fall of the forecast's central path, kg, below the current weight of someone already
/// underweight that raises `forecast_underweight` even when the trend cannot yet tell it from
/// none: a kilogram is more than the weigh-ins' scatter (program choice). Without it, a program
/// that set the outcomes module's `underweight_bmi_below` lower (17, say) had no flag at all for
/// a person at BMI 18 whose forecast went on down to 16. A smaller fall raises it too when the
/// trend is still falling (its slope's whole 95 % interval below zero): at BMI 17.6 and 0.2 kg a
/// week, a forecast of 28 days (`forecast_min_days: 28` in the program's last month) fell 0.8 kg
/// and nothing was flagged. Any further loss below BMI 18.5 (WHO 2000, Technical Report Series
/// 894: underweight) is a clinician's matter once it is a loss at all; a path a little lower on
/// a weight the trend cannot tell from steady is not one.
const FALLS_FURTHER_KG: f64 = 1.0;

/// BMI from which WHO calls a weight overweight (pre-obese), below it normal (18.5–24.9; WHO
/// 2000, Technical Report Series 894): a steady state below BMI 16 is a clinical flag only for
/// someone below it now. For someone heavier, an intake that would end there if held for ever
/// is a usual weight-loss diet (1,200–1,500 kcal/d for women, 1,500–1,800 for men, AHA/ACC/TOS
/// 2013; from memory), and the forecast's path is what tells when it goes too far.
const OVERWEIGHT_BMI: f64 = 25.0;
/// BMI below which the forecast's path, or its steady state, raises `forecast_underweight`:
/// the WHO cut-off for underweight (WHO 2000, Technical Report Series 894).
const UNDERWEIGHT_BMI: f64 = 18.5;

struct Settings {
    equation: RestingEquation,
    base_pal: f64,
    pal_sd: f64,
    underreport_prior: f64,
    underreport_sd: f64,
    window_days: u64,
    max_intake_x_rmr: f64,
    very_low_implied: f64,
    target_loss: f64,
    max_safe_loss: f64,
    floor_female: f64,
    floor_male: f64,
    drift_threshold: f64,
    walking_met: f64,
    max_walk_minutes: f64,
    forecast_min_days: i64,
}

impl Settings {
    fn from_ctx(ctx: &ModuleContext) -> Result<Self, ModuleError> {
        let code = ctx.setting_str("equation", "mifflin_st_jeor");
        let equation = RestingEquation::from_code(code).ok_or_else(|| {
            ModuleError::new(format!(
                "setting `equation` of module `energy`: `{code}` is not one of: {}",
                RestingEquation::ALL.map(|e| e.code()).join(", ")
            ))
        })?;
        Ok(Settings {
            equation,
            base_pal: ctx.setting_f64("base_pal", 1.6),
            pal_sd: ctx.setting_f64("pal_sd", PAL_SD).max(0.001),
            underreport_prior: ctx
                .setting_f64("underreporting_prior_percent", 100.0 * UNDERREPORT_PRIOR)
                / 100.0,
            underreport_sd: (ctx.setting_f64("underreporting_sd_percent", 100.0 * UNDERREPORT_SD)
                / 100.0)
                .max(0.001),
            window_days: ctx.setting_f64("window_days", 28.0).round().max(1.0) as u64,
            max_intake_x_rmr: ctx
                .setting_f64("max_sustained_intake_x_rmr", MAX_SUSTAINED_INTAKE_X_RMR),
            very_low_implied: ctx.setting_f64("very_low_implied_intake", VERY_LOW_IMPLIED_INTAKE),
            target_loss: ctx.setting_f64("target_loss_kg_per_week", 0.5),
            max_safe_loss: ctx.setting_f64("max_safe_loss_kg_per_week", 1.0),
            floor_female: ctx.setting_f64("intake_floor_female", 1200.0),
            floor_male: ctx.setting_f64("intake_floor_male", 1500.0),
            drift_threshold: ctx.setting_f64("drift_threshold_kcal_per_day", 150.0),
            walking_met: ctx.setting_f64("walking_met", 3.5),
            max_walk_minutes: ctx.setting_f64("max_walk_minutes", MAX_WALK_MIN),
            forecast_min_days: ctx.setting_f64("forecast_min_days", 84.0).round().max(0.0) as i64,
        })
    }
}

/// A value with an optional interval.
#[derive(Debug, Clone, Copy, PartialEq)]
struct Band {
    value: f64,
    lower: Option<f64>,
    upper: Option<f64>,
}

impl Band {
    fn map(self, f: impl Fn(f64) -> f64) -> Band {
        Band {
            value: f(self.value),
            lower: self.lower.map(&f),
            upper: self.upper.map(&f),
        }
    }
}

struct TrendPeriod {
    kind: PeriodKind,
    start: NaiveDate,
    end: NaiveDate,
    slope_wk: Option<f64>,
    lower_wk: Option<f64>,
    upper_wk: Option<f64>,
    weight_start: Option<f64>,
}

/// The parts of the `trend` output this module reads, cut at the end of the period.
#[derive(Default)]
struct Trend {
    level: BTreeMap<NaiveDate, Band>,
    slope: BTreeMap<NaiveDate, Band>,
    /// Mean slope over the 28 days ending each day (`weight_slope_28d`), when the trend gives it.
    slope28: BTreeMap<NaiveDate, Band>,
    periods: Vec<TrendPeriod>,
}

fn series_map(s: &Series, to: NaiveDate) -> BTreeMap<NaiveDate, Band> {
    s.points
        .iter()
        .filter(|p| p.date <= to && p.value.is_finite())
        .map(|p| {
            (
                p.date,
                Band {
                    value: p.value,
                    lower: p.lower,
                    upper: p.upper,
                },
            )
        })
        .collect()
}

/// The parts of the trend's view this module uses, cut at `to`.
fn parse_trend(view: &TrendView, to: NaiveDate) -> Trend {
    let finite = |x: Option<f64>| x.filter(|x| x.is_finite());
    Trend {
        level: series_map(&view.weight_trend, to),
        slope: series_map(&view.weight_slope, to),
        slope28: view
            .weight_slope_28d
            .as_ref()
            .map(|s| series_map(s, to))
            .unwrap_or_default(),
        periods: view
            .periods
            .iter()
            .filter(|row| row.start <= to)
            .map(|row| TrendPeriod {
                kind: row.kind,
                start: row.start,
                end: row.end.min(to),
                slope_wk: finite(row.slope_kg_per_week),
                lower_wk: finite(row.slope_lower_kg_per_week),
                upper_wk: finite(row.slope_upper_kg_per_week),
                weight_start: finite(row.weight_start_kg),
            })
            .collect(),
    }
}

/// Mean of the values (and of the bounds, when every point has them) over [from, to].
fn mean_band(map: &BTreeMap<NaiveDate, Band>, from: NaiveDate, to: NaiveDate) -> Option<Band> {
    if from > to {
        return None;
    }
    let pts: Vec<&Band> = map.range(from..=to).map(|(_, b)| b).collect();
    if pts.is_empty() {
        return None;
    }
    let n = pts.len() as f64;
    let mean_opt = |f: &dyn Fn(&Band) -> Option<f64>| {
        pts.iter().map(|b| f(b)).sum::<Option<f64>>().map(|s| s / n)
    };
    Some(Band {
        value: pts.iter().map(|b| b.value).sum::<f64>() / n,
        lower: mean_opt(&|b| b.lower),
        upper: mean_opt(&|b| b.upper),
    })
}

/// Mean slope over [from, to] with its 95 % band: the trend's exact 28-day window slope when
/// the window is 28 days long and the trend gives it, else the mean of the daily slopes and of
/// their bounds (conservative).
fn window_slope(t: &Trend, from: NaiveDate, to: NaiveDate) -> Option<Band> {
    if days_incl(from, to) == 28
        && let Some(b) = t.slope28.get(&to)
    {
        return Some(*b);
    }
    mean_band(&t.slope, from, to)
}

/// 0.975 quantile of Student's t (Cornish–Fisher expansion; within 0.05 of the exact value for
/// df ≥ 4, which is all the fallback fit needs).
fn t975(df: f64) -> f64 {
    let z: f64 = 1.959_963_985;
    z + (z.powi(3) + z) / (4.0 * df)
        + (5.0 * z.powi(5) + 16.0 * z.powi(3) + 3.0 * z) / (96.0 * df * df)
}

/// What the straight-line fallback gives: the fitted level at the last weigh-in, the mean
/// level over the window, and the slope with a t-based 95 % interval.
struct LineFit {
    level_end: f64,
    level_mean: f64,
    slope: Band,
}

/// Straight-line fit of weigh-ins in [from, to] when no trend output exists.
fn ols_fallback(data: &ParticipantData, from: NaiveDate, to: NaiveDate) -> Option<LineFit> {
    let pts: Vec<(f64, f64)> = data
        .weights
        .iter()
        .filter(|w| w.date >= from && w.date <= to)
        .map(|w| ((w.date - from).num_days() as f64, w.weight.kg()))
        .collect();
    let n = pts.len();
    let span = pts.last()?.0 - pts.first()?.0;
    if n < 6 || span < 14.0 {
        return None;
    }
    let nf = n as f64;
    let mx = pts.iter().map(|p| p.0).sum::<f64>() / nf;
    let my = pts.iter().map(|p| p.1).sum::<f64>() / nf;
    let sxx: f64 = pts.iter().map(|p| (p.0 - mx).powi(2)).sum();
    let sxy: f64 = pts.iter().map(|p| (p.0 - mx) * (p.1 - my)).sum();
    let b = sxy / sxx;
    let a = my - b * mx;
    let ssr: f64 = pts.iter().map(|p| (p.1 - a - b * p.0).powi(2)).sum();
    let se = (ssr / (nf - 2.0) / sxx).sqrt();
    let h = t975(nf - 2.0) * se;
    let last_t = pts.last()?.0;
    Some(LineFit {
        level_end: a + b * last_t,
        level_mean: my,
        slope: Band {
            value: b,
            lower: Some(b - h),
            upper: Some(b + h),
        },
    })
}

fn day_after(d: NaiveDate, n: u64) -> NaiveDate {
    d.checked_add_days(Days::new(n)).unwrap_or(d)
}

fn day_before(d: NaiveDate, n: u64) -> NaiveDate {
    d.checked_sub_days(Days::new(n)).unwrap_or(d)
}

fn days_incl(from: NaiveDate, to: NaiveDate) -> i64 {
    (to - from).num_days() + 1
}

/// A sex-specific figure (a resting-energy equation, a body-fat equation) for a person whose sex
/// is recorded: (value, 0). When it is not: the mean of the female and male forms and half their
/// difference, the SD of an even two-point mixture. For Mifflin–St Jeor that is 83 kcal/d (the
/// forms differ only in their constant, +5 and −161; Mifflin et al. 1990, Am J Clin Nutr 51:241).
fn either_sex(sex: Option<Sex>, f: impl Fn(Sex) -> f64) -> (f64, f64) {
    match sex {
        Some(sex) => (f(sex), 0.0),
        None => {
            let (a, b) = (f(Sex::Female), f(Sex::Male));
            ((a + b) / 2.0, (a - b).abs() / 2.0)
        }
    }
}

/// Everything about the person the formulas need.
struct Person<'a> {
    data: &'a ParticipantData,
    /// `None`: not recorded (see [`either_sex`]).
    sex: Option<Sex>,
    /// SD of resting energy from not knowing the person's sex, as a fraction of RMR₀ (0 when
    /// recorded); added to [`RMR_REL_SD`] in the baseline requirement's prior.
    sex_rel_sd: f64,
    height_cm: f64,
    equation: RestingEquation,
    model: HallModel,
    lin: LinearisedModel,
    trend: Trend,
    /// `max_sustained_intake_x_rmr` (see [`MAX_SUSTAINED_INTAKE_X_RMR`]).
    max_intake_x_rmr: f64,
    /// `very_low_implied_intake` (see [`VERY_LOW_IMPLIED_INTAKE`]), kcal/d.
    very_low_implied: f64,
    /// The profile notes a pregnancy: weight change then includes the baby, the placenta and
    /// extra fluid, which the adult energy-balance model does not describe.
    pregnant: bool,
    /// The profile notes breastfeeding: milk carries energy out of the body that the model
    /// does not count, so every intake read from the weight trend would be too low by it.
    breastfeeding: bool,
}

impl Person<'_> {
    /// Resting energy at body weight `bw` on day `d`. Lean-mass equations get the lean mass of
    /// the Forbes curve through the measured baseline composition.
    fn rmr_at(&self, bw: f64, d: NaiveDate) -> f64 {
        let lean = self
            .equation
            .needs_lean_mass()
            .then(|| self.model.lean_for_fat(self.model.fat_for_weight(bw)));
        let age = self.equation.age_on(&self.data.profile, d);
        either_sex(self.sex, |sex| {
            self.equation
                .resting_energy(sex, bw, self.height_cm, age, lean)
        })
        .0
    }

    /// Body weight on day `d`: the trend level on or before `d`, else the last weigh-in on or
    /// before `d`, else the first weigh-in.
    fn weight_on(&self, d: NaiveDate) -> Option<f64> {
        if let Some((_, b)) = self.trend.level.range(..=d).next_back() {
            return Some(b.value);
        }
        if let Some((_, b)) = self.trend.level.iter().next() {
            return Some(b.value);
        }
        let w = &self.data.weights;
        w.iter()
            .rev()
            .find(|w| w.date <= d)
            .or(w.first())
            .map(|w| w.weight.kg())
    }

    /// Net MET-hours per day of logged activity over [from, to] (kcal per kg per day).
    fn activity_met_hours(&self, from: NaiveDate, to: NaiveDate) -> f64 {
        let n = days_incl(from, to);
        if n <= 0 {
            return 0.0;
        }
        let total: f64 = self
            .data
            .activity
            .iter()
            .filter(|a| a.date >= from && a.date <= to)
            .map(|a| activity_kcal_net(a.met, 1.0, a.minutes / 60.0))
            // fold from +0.0: an empty float sum is −0.0, which would print as "-0".
            .fold(0.0, |acc, x| acc + x);
        total / n as f64
    }

    /// Net activity kcal per day over [from, to], each entry at the weight of its day.
    fn activity_kcal(&self, from: NaiveDate, to: NaiveDate, fallback_bw: f64) -> f64 {
        let n = days_incl(from, to);
        if n <= 0 {
            return 0.0;
        }
        let total: f64 = self
            .data
            .activity
            .iter()
            .filter(|a| a.date >= from && a.date <= to)
            .map(|a| {
                let w = self.weight_on(a.date).unwrap_or(fallback_bw);
                activity_kcal_net(a.met, w, a.minutes / 60.0)
            })
            .fold(0.0, |acc, x| acc + x);
        total / n as f64
    }

    /// Mean logged intake over logged days in [from, to], with the number of logged days.
    fn logged(&self, from: NaiveDate, to: NaiveDate) -> (Option<f64>, usize) {
        let days: Vec<f64> = self
            .data
            .intake
            .iter()
            .filter(|i| i.date >= from && i.date <= to)
            .map(|i| i.kcal)
            .collect();
        let n = days.len();
        let mean = (n > 0).then(|| days.iter().sum::<f64>() / n as f64);
        (mean, n)
    }

    /// Implied intake over a window that starts at the diet's start (fast compartments still
    /// emptying): with `bw` the window's mean weight, `slope` its mean slope and `span` its
    /// length in days, ΔEI = (ε·ΔBW + ρ·slope)/(1 + κε + κρ/span), κ from
    /// [`crate::dynamics::fast_compartment_kg_per_kcal`], then + EI₀ + A/(1 − β).
    fn implied_intake_from_start(&self, bw: f64, slope: f64, met_hours: f64, span: f64) -> f64 {
        let kappa = crate::dynamics::fast_compartment_kg_per_kcal(self.model.ei0);
        let raw = self.lin.implied_intake_change(bw - self.model.bw0, slope);
        self.model.ei0
            + raw / (1.0 + kappa * self.lin.epsilon + kappa * self.lin.rho / span.max(1.0))
            + met_hours * bw / (1.0 - BETA)
    }

    /// Variance of an implied intake from the slope and the model parameters (not from the
    /// baseline requirement), kcal²/d²: (ρ·SD_slope)² + (SD_ρ·slope)² + (SD_ε·ΔBW)².
    fn change_var(&self, bw: f64, slope: f64, slope_sd: f64) -> f64 {
        (self.lin.rho * slope_sd).powi(2)
            + (RHO_REL_SD * self.lin.rho * slope).powi(2)
            + (EPS_REL_SD * self.lin.epsilon * (bw - self.model.bw0)).powi(2)
    }

    /// Variance of the total expenditure read off the energy balance, TDEE = implied intake −
    /// e_d·slope, from the slope and the model parameters (not from the baseline requirement),
    /// kcal²/d²: ((ρ − e_d)·SD_slope)² + (SD_ρ·slope)² + (SD_ε·ΔBW)². The slope enters the
    /// implied intake through ρ and leaves it through the energy density e_d of the change, so
    /// most of its uncertainty cancels (the energy density shares ρ's relative SD).
    fn tdee_change_var(&self, bw: f64, slope: f64, slope_sd: f64, ed: f64) -> f64 {
        ((self.lin.rho - ed) * slope_sd).powi(2)
            + (RHO_REL_SD * (self.lin.rho - ed) * slope).powi(2)
            + (EPS_REL_SD * self.lin.epsilon * (bw - self.model.bw0)).powi(2)
    }

    /// Implied intake at weight `bw`, slope `slope` (kg/d) and net activity `met_hours`
    /// (kcal/kg/d): EI₀ + ε·ΔBW + ρ·slope + A/(1 − β).
    fn implied_intake(&self, bw: f64, slope: f64, met_hours: f64) -> f64 {
        self.model.ei0
            + self.lin.implied_intake_change(bw - self.model.bw0, slope)
            + met_hours * bw / (1.0 - BETA)
    }

    /// Inverse of [`Person::implied_intake`]: the slope (kg/d) the linearised model expects at
    /// weight `bw` with intake `intake` and activity `met_hours`.
    fn expected_slope(&self, bw: f64, intake: f64, met_hours: f64) -> f64 {
        (intake
            - self.model.ei0
            - self.lin.epsilon * (bw - self.model.bw0)
            - met_hours * bw / (1.0 - BETA))
            / self.lin.rho
    }

    /// Whether an implied intake `intake` at body weight `bw` on day `d` can be energy balance
    /// at all, and if not why: below zero (a fall faster than eating nothing at all gives),
    /// below a very-low-calorie diet (`very_low_implied_intake`) or above the most a person can
    /// take in over weeks (`max_sustained_intake_x_rmr` × resting energy). The one test for the
    /// window, the weekly table and the plateau table.
    fn implausible(&self, bw: f64, d: NaiveDate, intake: f64) -> Option<Unexplained> {
        let ceiling = self.max_intake_x_rmr * self.rmr_at(bw, d);
        if self.pregnant {
            Some(Unexplained::Pregnancy)
        } else if self.breastfeeding {
            Some(Unexplained::Breastfeeding)
        } else if intake < 0.0 {
            Some(Unexplained::Fall)
        } else if intake < self.very_low_implied {
            Some(Unexplained::VeryLow {
                floor: self.very_low_implied,
            })
        } else if intake > ceiling {
            Some(Unexplained::Rise { intake, ceiling })
        } else {
            None
        }
    }

    /// The intake floor for the person's sex; the higher of the two when it is not recorded
    /// (the careful side: no option is offered below either).
    fn floor(&self, s: &Settings) -> f64 {
        match self.sex {
            Some(Sex::Female) => s.floor_female,
            Some(Sex::Male) => s.floor_male,
            None => s.floor_female.max(s.floor_male),
        }
    }
}

/// A table with the columns of row type `R` and no rows yet.
fn empty_table<R: TableRow>(name: &str, label: &str) -> Table {
    Table {
        name: name.into(),
        label: label.into(),
        columns: R::columns(),
        rows: vec![],
    }
}

/// Computes the module's output (see the module docs for every definition): the person's
/// baseline ([`start`]), their baseline requirement ([`baseline_requirement`]), the current
/// energy state ([`current_state`]), the forecast ([`forecast`]) and the tables.
pub(crate) fn run(
    ctx: &ModuleContext,
    data: &ParticipantData,
) -> Result<ModuleOutput, ModuleError> {
    let s = Settings::from_ctx(ctx)?;
    let mut out = ModuleOutput::default();
    let to = ctx.period.to;
    let enrolled = data.profile.enrolled;
    // The trend's output, read through its view (an output that does not read is treated as
    // no trend, and fails loudly in debug builds).
    let trend_out = ctx.earlier.get(TrendView::MODULE).and_then(|o| {
        TrendView::from_output(o)
            .inspect_err(|e| debug_assert!(false, "{e}"))
            .ok()
    });
    let trend = trend_out
        .as_ref()
        .map(|t| parse_trend(t, to))
        .unwrap_or_default();
    if trend_out.is_none() {
        out.push_flag(
            EnergyFlag::InsufficientData.as_str(),
            FlagSeverity::Info,
            "The weight trend was not available, so the energy estimates use a straight-line \
             fit of the weigh-ins where there were enough of them.",
        );
    }
    let Some((mut p, start)) = start(&s, data, trend, to, &mut out) else {
        out.push_flag(
            EnergyFlag::InsufficientData.as_str(),
            FlagSeverity::Info,
            "No weigh-ins up to the end of this period, so no energy estimates could be made.",
        );
        push_empty(&mut out, &s);
        return Ok(out);
    };
    // The baseline requirement EI₀ is not known: RMR × PAL with both uncertain, then updated by
    // the food logs and the weight trend together, with under-reporting as a parameter.
    let withdrew_cut = data.profile.withdrew.map_or(to, |w| w.min(to));
    let baseline = baseline_requirement(&p, &s, enrolled, withdrew_cut);
    let pal_post = (baseline.ei0 / start.rmr0).clamp(1.1, 2.5);
    p.model = HallModel::new(start.bw0, start.fm0, start.rmr0, pal_post);
    p.lin = LinearisedModel::from_baseline(start.bw0, start.fm0, start.rmr0, pal_post);

    let mut cur = current_state(ctx, &s, &p, &baseline, trend_out.is_none(), start.bw0);
    // Someone who left before the period began: the period's activity, energy use and intake
    // would describe the days after they left (the report shows none of them, and the tidy
    // metrics, which are these outputs, must not either). Resting energy at the last weight
    // stays; the weekly table already stops at the withdrawal.
    let left_before = data.profile.withdrew.filter(|w| *w < ctx.period.from);
    if let Some(left) = left_before {
        cur.slope = None;
        cur.implied = None;
        cur.unexplained = None;
        cur.underreport = None;
        cur.logged = None;
        out.push_flag(
            EnergyFlag::LeftBeforePeriod.as_str(),
            FlagSeverity::Info,
            format!(
                "Left the program on {left}, before this period began: this period's activity, \
                 energy use, logged and implied intake, forecast and options are not estimated \
                 (they would describe the days after leaving)."
            ),
        );
    }
    if left_before.is_some() {
        // Said above; the notes below would be beside the point.
    } else if cur.unexplained == Some(Unexplained::Pregnancy) {
        out.push_flag(
            EnergyFlag::NotModelled.as_str(),
            FlagSeverity::Info,
            "The profile notes a pregnancy. Weight change in pregnancy includes the baby, the \
             placenta and extra fluid, which this energy-balance model for adults does not \
             describe, so the intake implied by the weight trend, what it says about the food \
             logs, the forecast and the options are not shown.",
        );
    } else if cur.unexplained == Some(Unexplained::Breastfeeding) {
        // Milk energy output is about 500 kcal a day in the first six months of exclusive
        // breastfeeding and about 400 after (0.78 and 0.6 L a day at 0.67 kcal/g: IOM 2005,
        // Dietary Reference Intakes for Energy, Carbohydrate, Fiber, Fat, Fatty Acids,
        // Cholesterol, Protein, and Amino Acids, ch. 5, as summarised by Butte & King 2005,
        // Public Health Nutr 8:1010, the FAO/WHO/UNU 2004 background paper, which gives
        // 505 kcal a day extra in the first six months. The IOM volumes and energy density are
        // checked against a published summary of its factorial method; the FAO/WHO/UNU figure
        // and the chapter number are from memory). None of it is in the model,
        // so the implied intake would read that much too low, the logs as over-reported by it,
        // and the forecast a loss that is not coming (a "past underweight" note at BMI 25.8).
        out.push_flag(
            EnergyFlag::NotModelled.as_str(),
            FlagSeverity::Info,
            "While breastfeeding, making milk uses energy, often around 500 kcal a day, that \
             this energy-balance model for adults does not count: the energy use shown leaves \
             it out, and an intake read from the weight trend would be too low by about that \
             much. So that intake, what it says about the food logs, the forecast and the \
             options are not shown.",
        );
    } else if let Some(why @ (Unexplained::Fall | Unexplained::VeryLow { .. })) = cur.unexplained {
        // Too low to print: a very-low-calorie diet's intake in a program that is not one, or
        // a fall the weigh-ins cannot carry. Either is for a clinician; the message names no
        // figure, since the report shows it to the participant.
        let what = match why {
            Unexplained::VeryLow { floor } => format!(
                "came down as fast as eating less than {floor:.0} kcal a day would make it, the \
                 level of a very-low-calorie diet, which is normally followed only under medical \
                 supervision. Either very little is being eaten, or the fall is not body tissue \
                 (a change of scale or clothing, a mistyped weigh-in, a shift in body water)"
            ),
            _ => "fell faster than eating nothing at all would explain. A change of scale or \
                  clothing, a mistyped weigh-in or a shift in body water is more likely; a real \
                  loss this fast (illness, not eating) needs a clinician's look"
                .to_string(),
        };
        out.push_flag(
            EnergyFlag::VeryLowImpliedIntake.as_str(),
            FlagSeverity::Clinical,
            format!(
                "Over the last {} days the weight trend {what}. Please check the recent \
                 weigh-ins and review this with a licensed clinician. The intake implied by the \
                 weight trend, what it says about the food logs, the forecast and the options \
                 are not shown.",
                s.window_days
            ),
        );
    } else if let Some(why) = cur.unexplained {
        let what = match why {
            Unexplained::Rise { intake, ceiling } => format!(
                "rose faster than food can build body tissue: it would take about {:.0} kcal a \
                 day, more than a person can take in and absorb for weeks on end (about {:.1} \
                 times resting energy at the mean weight of those days, here about \
                 {ceiling:.0} kcal a day). A change of scale or clothing, a mistyped weigh-in \
                 or fluid is more likely",
                intake.round(),
                s.max_intake_x_rmr
            ),
            Unexplained::Pregnancy
            | Unexplained::Breastfeeding
            | Unexplained::Fall
            | Unexplained::VeryLow { .. } => {
                unreachable!("handled above")
            }
        };
        out.push_flag(
            EnergyFlag::UnexplainedWeightChange.as_str(),
            FlagSeverity::Notice,
            format!(
                "Over the last {} days the weight trend {what}; please check the recent \
                 weigh-ins. The intake implied by the weight trend, what it says about the \
                 food logs, the forecast and the options are not shown.",
                s.window_days
            ),
        );
    } else if cur.slope.is_none() && trend_out.is_some() {
        out.push_flag(
            EnergyFlag::InsufficientData.as_str(),
            FlagSeverity::Info,
            format!(
                "The weight trend does not cover enough of the last {} days, so the intake \
                 implied by the weight trend, the forecast and the options could not be computed.",
                s.window_days
            ),
        );
    }
    push_current(&mut out, &p, &cur, left_before.is_some());
    let fc = forecast(ctx, &s, &p, &cur, withdrew_cut);
    push_underweight_flag(&mut out, &fc);
    push_forecast(&mut out, &p, &start, fc);

    // After a withdrawal there are no habits to estimate: the weekly table stops there.
    out.tables.push(weekly_table(&p, enrolled, withdrew_cut));
    out.tables.push(options_table(
        &p,
        &s,
        cur.bw,
        cur.slope,
        cur.implied,
        cur.logged,
    ));
    out.tables.push(plateau_table(&p, &s, enrolled));
    push_gap_flag(&mut out, &cur, s.window_days);
    // Logged intakes below the usual floors are flagged by the outcomes module, which owns the
    // safety flags; this module only refuses to recommend going below them.
    Ok(out)
}

/// The person at enrolment: baseline weight, body composition and resting energy.
struct Start {
    bw0: f64,
    fm0: f64,
    rmr0: f64,
    bf0: f64,
    bf_source: BodyFatSource,
}

/// Baseline weight (first trend level, else the first weigh-in up to `to`), body fat (profile or
/// Jackson et al. 2002), the resting equation (with its fallback flagged) and the body model at
/// the prior activity level. `None` without any weigh-in.
fn start<'a>(
    s: &Settings,
    data: &'a ParticipantData,
    trend: Trend,
    to: NaiveDate,
    out: &mut ModuleOutput,
) -> Option<(Person<'a>, Start)> {
    let bw0 = trend.level.values().next().map(|b| b.value).or_else(|| {
        data.weights
            .iter()
            .find(|w| w.date <= to)
            .map(|w| w.weight.kg())
    })?;
    let sex = data.profile.sex;
    let height_cm = data.profile.height.cm();
    let age0 = data.profile.age_on(data.profile.enrolled);
    let (bf0, bf_source) = match data.profile.body_fat_percent {
        Some(bf) => (bf, BodyFatSource::Measured),
        None => (
            // Not recorded: the mean of the two forms, which lie about 11 points of body fat
            // apart at BMI 30 (Jackson et al. 2002's coefficients). The ±5.5 points move the
            // energy density of weight change (lean share C/(C+F); Forbes 2000, Ann N Y Acad
            // Sci 904:359 — from memory) by about ±2.5 % at 90 kg: some 15 kcal/d at a loss
            // of 0.5 kg a week, small beside resting energy's spread, so only the latter is
            // carried into the intervals (program choice).
            either_sex(sex, |sex| {
                jackson_2002_body_fat(
                    sex,
                    data.bmi(cohortpress_metric_api::units::Mass::from_kg(bw0)),
                    age0,
                )
            })
            .0,
            BodyFatSource::Jackson2002,
        ),
    };
    // The model needs a positive fat mass (ln F/F₀); an estimate outside 3–70 % (e.g. Jackson's
    // equation at a very low BMI) is held to that range, and the value used is the one reported.
    let bf0 = bf0.clamp(3.0, 70.0);
    let fm0 = bw0 * bf0 / 100.0;
    let mut equation = s.equation;
    if equation.needs_lean_mass() && data.profile.body_fat_percent.is_none() {
        out.push_flag(
            EnergyFlag::EquationFallback.as_str(),
            FlagSeverity::Info,
            format!(
                "The {} equation needs a measured body-fat percentage, which the profile does \
                 not give; resting energy uses Mifflin–St Jeor instead.",
                equation.label()
            ),
        );
        equation = RestingEquation::MifflinStJeor;
    }
    let lean0 = equation.needs_lean_mass().then_some(bw0 - fm0);
    let eq_age0 = equation.age_on(&data.profile, data.profile.enrolled);
    let (rmr0, rmr0_sex_sd) = either_sex(sex, |sex| {
        equation.resting_energy(sex, bw0, height_cm, eq_age0, lean0)
    });
    let person = Person {
        data,
        sex,
        sex_rel_sd: rmr0_sex_sd / rmr0.max(1.0),
        height_cm,
        equation,
        model: HallModel::new(bw0, fm0, rmr0, s.base_pal),
        lin: LinearisedModel::from_baseline(bw0, fm0, rmr0, s.base_pal),
        trend,
        max_intake_x_rmr: s.max_intake_x_rmr,
        very_low_implied: s.very_low_implied,
        pregnant: data.profile.flags.iter().any(|f| f == PREGNANCY_FLAG),
        breastfeeding: data.profile.flags.iter().any(|f| f == BREASTFEEDING_FLAG),
    };
    Some((
        person,
        Start {
            bw0,
            fm0,
            rmr0,
            bf0,
            bf_source,
        },
    ))
}

/// Variance of the energy balance ρ_tissue·s̄ (the energy stored or released by the weight
/// change, kcal/d), kcal²/d²: (ρ_tissue·SD_s)² + (SD_ρ·ρ_tissue·s̄)², the energy density sharing
/// ρ's relative SD as in [`Person::tdee_change_var`]. The baseline requirement and ε·ΔBW are in
/// both the implied intake and the total expenditure, and cancel.
fn stored_var(slope: f64, slope_sd: f64, ed: f64) -> f64 {
    (ed * slope_sd).powi(2) + (RHO_REL_SD * ed * slope).powi(2)
}

/// The energy state over the last `window_days` of the period.
struct Current {
    /// Current weight (trend level at the period end, or the fallback fit's end).
    bw: f64,
    /// Mean slope over the window, kg/d, with its 95 % band.
    slope: Option<Band>,
    /// Net logged activity over the window, kcal/kg/d.
    met_h_window: f64,
    rmr: f64,
    /// Net logged activity over the window, kcal/d.
    activity: f64,
    logged: Option<f64>,
    logged_days: usize,
    implied: Option<Band>,
    /// The trend's change over the window is faster than any intake of zero or more can
    /// explain, or would need more than a person can take in (`slope` and `implied` are then
    /// withheld).
    unexplained: Option<Unexplained>,
    tdee: f64,
    /// SD of `tdee`, kcal/d (the baseline requirement and [`Person::tdee_change_var`]).
    tdee_sd: f64,
    underreport: Option<Band>,
    /// SD of the current energy balance without the baseline requirement (it cancels in
    /// forecasts), kcal/d.
    balance_sd: f64,
    /// SD of the energy balance printed beside the implied intake and the total expenditure
    /// (their difference, ρ_tissue·s̄), kcal/d: [`Person::stored_var`].
    stored_sd: f64,
}

/// Why an implied intake is not energy balance.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Unexplained {
    /// Below zero: a fall faster than eating nothing at all gives.
    Fall,
    /// From zero up to below `very_low_implied_intake` (kcal/d): a very-low-calorie diet's
    /// intake, or a fall the weigh-ins cannot carry.
    VeryLow { floor: f64 },
    /// Above the most a person can take in and absorb over weeks (kcal/d, both).
    Rise { intake: f64, ceiling: f64 },
    /// Any weight change in pregnancy: not adult energy balance (IOM 2009, Weight Gain During
    /// Pregnancy — from memory).
    Pregnancy,
    /// Any weight change while breastfeeding: milk's energy (about 500 kcal/d in the first six
    /// months; IOM 2005, see [`run`]) is an expenditure the model does not count.
    Breastfeeding,
}

/// SD of a slope from its 95 % band.
fn band_sd(b: &Band) -> f64 {
    match (b.lower, b.upper) {
        (Some(l), Some(u)) => (u - l).abs() / (2.0 * Z_95),
        _ => 0.0,
    }
}

/// Current weight, window slope, implied intake (with every source of uncertainty), total
/// expenditure and under-reporting.
fn current_state(
    ctx: &ModuleContext,
    s: &Settings,
    p: &Person<'_>,
    baseline: &Baseline,
    no_trend: bool,
    bw0: f64,
) -> Current {
    let to = ctx.period.to;
    let enrolled = p.data.profile.enrolled;
    let window_from = day_before(to, s.window_days - 1).max(enrolled);
    let fallback = if no_trend {
        ols_fallback(p.data, window_from, to)
    } else {
        None
    };
    let bw = match &fallback {
        Some(fit) => fit.level_end,
        None => p.weight_on(to).unwrap_or(bw0),
    };
    // The mean slope over the window pairs with the mean level over the window: the linear
    // estimator then gives the mean intake over the window (pairing it with the end weight would
    // read a decelerating loss as a lower intake).
    let bw_window = match &fallback {
        Some(fit) => fit.level_mean,
        None => mean_band(&p.trend.level, window_from, to).map_or(bw, |b| b.value),
    };
    let slope: Option<Band> = match &fallback {
        Some(fit) => Some(fit.slope),
        None => window_slope(&p.trend, window_from, to)
            // Require most of the window to be covered, so a few days do not pass for a month.
            .filter(|_| {
                p.trend.slope.range(window_from..=to).count() as i64
                    >= days_incl(window_from, to).min(s.window_days as i64) / 2
            }),
    };
    let rmr = p.rmr_at(bw, to);
    // Over the implied intake's window, as the logged intake below: it is printed beside it,
    // and without an implied intake it makes up the total (a monthly report's activity was the
    // period's mean beside intakes of its last 28 days; over the whole program, 180 days'
    // beside 28).
    let activity = p.activity_kcal(window_from, to, bw);
    // The logged intake over the window of the implied intake, so that their difference (the
    // intake gap, the logs-versus-trend flag) compares like with like: over a period of the
    // whole program the logs' mean of 180 days stood beside an implied intake of the last 28
    // (a gap of +1,691 kcal/d where the month's report read +1,400).
    let (logged_mean, logged_days) = p.logged(window_from, to);
    let logged = logged_mean.filter(|_| logged_days >= MIN_LOGGED_DAYS);
    let met_h_window = p.activity_met_hours(window_from, to);
    // Implied intake over the window with every source of uncertainty: the baseline
    // requirement (after the logs), the slope (its band already carries correlated scatter) and
    // the model's ρ and ε.
    let balance_sd = slope.map_or(0.0, |sl| {
        p.change_var(bw_window, sl.value, band_sd(&sl)).sqrt()
    });
    let implied: Option<Band> = slope.map(|sl| {
        let v = p.implied_intake(bw_window, sl.value, met_h_window);
        let h = Z_95 * (baseline.var + balance_sd * balance_sd).sqrt();
        Band {
            value: v,
            lower: Some((v - h).max(0.0)),
            upper: Some((v + h).max(0.0)),
        }
    });
    // An implied intake below zero is a weight change faster than eating nothing at all could
    // give; one above the most a person can take in over weeks, a rise faster than food could
    // supply: a step in the weigh-ins (another scale, clothing, a typing error) or a fluid
    // shift, not energy balance. Nothing is read from it: no implied intake, balance,
    // under-reporting, forecast or options, and the caller says why.
    let unexplained = implied.and_then(|i| p.implausible(bw_window, to, i.value));
    let (slope, implied, balance_sd) = if unexplained.is_some() {
        (None, None, 0.0)
    } else {
        (slope, implied, balance_sd)
    };
    // Expenditure: by energy balance when the intake is implied (intake minus the energy
    // stored, ρ_stored·dBW/dt with the energy density of the tissue change; Hall 2008 Int J
    // Obes 32:573, from memory), else resting × the person's PAL + logged activity.
    let (tdee, tdee_sd, stored_sd) = match (implied, slope) {
        (Some(i), Some(sl)) => {
            let ed =
                crate::dynamics::energy_density_of_weight_change(p.model.fat_for_weight(bw_window));
            (
                i.value - ed * sl.value,
                (baseline.var + p.tdee_change_var(bw_window, sl.value, band_sd(&sl), ed)).sqrt(),
                stored_var(sl.value, band_sd(&sl), ed).sqrt(),
            )
        }
        // Resting × PAL: the baseline requirement's uncertainty (activity level and resting
        // energy) scaled to today's resting energy.
        _ => (
            rmr * p.model.pal + activity,
            baseline.var.sqrt() * rmr * p.model.pal / p.model.ei0.max(1.0),
            0.0,
        ),
    };
    // Under-reporting: the person's own share from every block of logs and trend (the joint
    // posterior); without such blocks, the share missing from the window's logs.
    let (logged_window, logged_window_days) = (logged_mean, logged_days);
    let underreport = match (baseline.underreport, implied, logged_window) {
        (Some((m, l, u)), Some(_), _) => Some(Band {
            value: 100.0 * m,
            lower: Some(100.0 * l),
            upper: Some(100.0 * u),
        }),
        (None, Some(i), Some(l)) if logged_window_days >= MIN_LOGGED_DAYS && i.value > 0.0 => {
            let pct = |x: f64| 100.0 * (1.0 - l / x.max(1.0));
            // The share missing grows with the implied intake: its lower bound is the implied
            // intake's lower bound (the two were swapped, which put the lower bound above the
            // upper and stopped the module).
            Some(Band {
                value: pct(i.value),
                lower: i.lower.map(pct),
                upper: i.upper.map(pct),
            })
        }
        _ => None,
    };
    Current {
        bw,
        slope,
        unexplained,
        met_h_window,
        rmr,
        activity,
        logged,
        logged_days,
        implied,
        tdee,
        tdee_sd,
        underreport,
        balance_sd,
        stored_sd,
    }
}

/// The current-state scalars.
/// `left_before`: the person left before the period began, and only resting energy and the
/// baseline figures are given.
fn push_current(out: &mut ModuleOutput, p: &Person<'_>, cur: &Current, left_before: bool) {
    let implied = cur.implied;
    let in_program = |x: f64| Some(x).filter(|_| !left_before);
    out.push_scalar(
        names::RMR_KCAL_PER_DAY,
        Some(cur.rmr),
        "kcal/d",
        &format!("Resting energy ({})", p.equation.label()),
    );
    out.push_scalar(
        names::ACTIVITY_NET_KCAL_PER_DAY,
        in_program(cur.activity),
        "kcal/d",
        "Logged activity, net of resting ((MET − 1) × kg × h), mean over the implied intake's \
         window, added to the resting-based total",
    );
    // The 95 % interval, kept at or above resting energy: the total includes it.
    let h = Z_95 * cur.tdee_sd;
    out.push_interval(
        names::TDEE_KCAL_PER_DAY,
        in_program(cur.tdee),
        in_program((cur.tdee - h).max(cur.rmr.min(cur.tdee))),
        in_program(cur.tdee + h),
        "kcal/d",
        if implied.is_some() {
            "Total expenditure: implied intake minus the energy stored or released by the weight change"
        } else {
            "Total expenditure: resting × the activity level estimated for this person + logged activity"
        },
    );
    out.push_scalar(
        names::PAL_ESTIMATE,
        Some(p.model.pal),
        "",
        "Baseline activity level (TEE/RMR) after combining the prior with the food logs and the weight trend",
    );
    out.push_scalar(
        names::LOGGED_INTAKE_KCAL_PER_DAY,
        cur.logged,
        "kcal/d",
        "Logged intake, mean of logged days",
    );
    out.push_scalar(
        names::LOGGED_DAYS,
        in_program(cur.logged_days as f64),
        "d",
        "Days with a food log",
    );
    out.push_interval(
        names::IMPLIED_INTAKE_KCAL_PER_DAY,
        implied.map(|b| b.value),
        implied.and_then(|b| b.lower),
        implied.and_then(|b| b.upper),
        "kcal/d",
        "Intake implied by the weight trend (Hall & Chow 2011), 95 % interval",
    );
    out.push_scalar(
        names::IMPLIED_INTAKE_LOWER_KCAL_PER_DAY,
        implied.and_then(|b| b.lower),
        "kcal/d",
        "Lower 95 % bound of the implied intake (advice is checked against it)",
    );
    out.push_scalar(
        names::IMPLIED_INTAKE_UPPER_KCAL_PER_DAY,
        implied.and_then(|b| b.upper),
        "kcal/d",
        "Upper 95 % bound of the implied intake",
    );
    let ur = cur.underreport;
    out.push_interval(
        names::UNDERREPORTING_PERCENT,
        ur.map(|b| b.value),
        ur.and_then(|b| b.lower),
        ur.and_then(|b| b.upper),
        "%",
        "Share of intake missing from the food logs (the person's own share, from every four \
         weeks of logs and weight trend together), 95 % interval",
    );
    let gap = gap(cur);
    out.push_interval(
        names::INTAKE_GAP_KCAL_PER_DAY,
        gap.map(|b| b.value),
        gap.and_then(|b| b.lower),
        gap.and_then(|b| b.upper),
        "kcal/d",
        "Implied minus logged intake (positive: more eaten than logged)",
    );
    // The balance is the implied intake minus the total expenditure, ρ_tissue·s̄: the baseline
    // requirement is in both and cancels, so its interval is that of the energy stored, not the
    // implied intake's shifted (which carried the baseline's uncertainty: +347 kcal/d with a
    // 95 % interval of −130 to +825 for a weight rising 0.37 kg a week, 95 % 0.28 to 0.45,
    // where the energy stored gives +242 to +452; hand-made participant, clinical28 helper).
    let h = Z_95 * cur.stored_sd;
    let balance = implied.map(|i| {
        let b = i.value - cur.tdee;
        Band {
            value: b,
            lower: Some(b - h),
            upper: Some(b + h),
        }
    });
    out.push_interval(
        names::ENERGY_BALANCE_KCAL_PER_DAY,
        balance.map(|b| b.value),
        balance.and_then(|b| b.lower),
        balance.and_then(|b| b.upper),
        "kcal/d",
        "Energy balance: implied intake minus expenditure at the current weight",
    );
}

/// Implied minus logged intake over the period.
fn gap(cur: &Current) -> Option<Band> {
    match (cur.implied, cur.logged) {
        (Some(i), Some(l)) => Some(i.map(|x| x - l)),
        _ => None,
    }
}

/// The forecast trajectory with its band, and the steady state.
struct Forecast {
    points: Vec<Point>,
    end: Option<Band>,
    /// Steady-state weight and its bounds (each withheld below `MIN_STEADY_STATE_BMI`).
    steady: Option<(f64, Option<f64>, Option<f64>)>,
    /// For someone not underweight now: the first day the central path goes below BMI 18.5
    /// within the horizon, and the steady state (kg) when it lies below it; computed before a
    /// path or steady state below BMI 16 is withheld, so that the person heading there is named.
    underweight: Option<(Option<NaiveDate>, Option<f64>)>,
    /// For someone underweight now: the day the central path is lowest and its weight, when it
    /// lies at least [`FALLS_FURTHER_KG`] below the current weight, or lies below it at all
    /// while the trend is still falling (also computed before a path below BMI 16 is withheld).
    falls_further: Option<(NaiveDate, f64)>,
    /// The current weight, kg.
    now_kg: f64,
    /// The weight at BMI 16 ([`MIN_STEADY_STATE_BMI`]), kg: a flag names no weight below it.
    severe_kg: f64,
    /// The current weight is below BMI 25 ([`OVERWEIGHT_BMI`]): loss is no goal now.
    healthy_now: bool,
}

/// Forecast to the program end (never shorter than `forecast_min_days`: in a program's last
/// month a forecast "to the end" would have no horizon at all) and the steady state.
///
/// The band holds (a) the current energy balance's uncertainty (slope and model parameters;
/// the baseline requirement cancels, since the model's expenditure shares it), (b) intake
/// moving after the last data at `INTAKE_DRIFT_PER_DAY` plus this person's own movement so far
/// (twice the drift after a withdrawal, when nothing is known of the habits), growing
/// linearly with time, (c) the uncertainty of the current trend weight and (d) on the upper
/// edge, the current deficit given up by the end of the horizon (a full relapse).
fn forecast(
    ctx: &ModuleContext,
    s: &Settings,
    p: &Person<'_>,
    cur: &Current,
    withdrew_cut: NaiveDate,
) -> Forecast {
    let to = ctx.period.to;
    let enrolled = p.data.profile.enrolled;
    let horizon = (ctx.program.end - to).num_days().max(s.forecast_min_days);
    let run_forecast = |intake: &dyn Fn(usize) -> f64| -> Vec<f64> {
        let start = p.model.state_at_weight(cur.bw, intake(0));
        p.model
            .simulate_from(start, horizon.max(0) as usize, intake, |_| cur.met_h_window)
            .iter()
            .map(|st| p.model.weight(st))
            .collect()
    };
    let withdrawn = p.data.profile.withdrew.is_some_and(|w| w <= to);
    let drift_rate = {
        let own = intake_movement_per_day(p, enrolled, withdrew_cut, s.window_days);
        let pop = if withdrawn {
            2.0 * INTAKE_DRIFT_PER_DAY
        } else {
            INTAKE_DRIFT_PER_DAY
        };
        (pop * pop + own * own).sqrt()
    };
    let level_half = p
        .trend
        .level
        .range(..=to)
        .next_back()
        .and_then(|(_, b)| Some((b.upper? - b.lower?).abs() / 2.0))
        .unwrap_or(0.0);
    let intake_sd_at = |d: usize| (cur.balance_sd.powi(2) + (drift_rate * d as f64).powi(2)).sqrt();
    let mut points = vec![];
    if let (Some(i), true) = (cur.implied, horizon > 0) {
        let mid = run_forecast(&|_| i.value);
        let lo_intake = |d: usize| (i.value - Z_95 * intake_sd_at(d)).max(0.0);
        // Adherence fades more often than it grows: the upper edge also gives up the current
        // deficit (below the baseline requirement) by the end of the horizon, the usual course
        // in programs of six months and longer (Thomas et al. 2014, Am J Clin Nutr 100:787;
        // program choice of "all of it", `FADE_SHARE`).
        let deficit = (p.model.ei0 - i.value).max(0.0);
        let hz = horizon.max(1) as f64;
        let hi_intake = |d: usize| {
            i.value + Z_95 * intake_sd_at(d) + FADE_SHARE * deficit * (d as f64 / hz).min(1.0)
        };
        // Glycogen with its water and extracellular fluid follow intake within about a day in
        // Hall's adult model (glycogen τ ≈ ρ_G·G₀/(2·CI₀) ≈ 1 d, extracellular fluid
        // τ ≈ [Na]/ξ_Na ≈ 1 d; Hall et al. 2011, Lancet 378:826, appendix; Hall 2006, Am J
        // Physiol Endocrinol Metab 291:E23, values from memory), so on an intake path I(d) the
        // fast weight moves by κ·(I(d) − I(0)) at equilibrium (κ from
        // `fast_compartment_kg_per_kcal`); the tissue model above carries the rest. The trend
        // weight the forecast starts from already holds today's fast weight.
        let kappa = crate::dynamics::fast_compartment_kg_per_kcal(p.model.ei0);
        let with_fast = |path: Vec<f64>, intake: &dyn Fn(usize) -> f64| -> Vec<f64> {
            let i0 = intake(0);
            path.into_iter()
                .enumerate()
                .map(|(d, w)| w + kappa * (intake(d) - i0))
                .collect()
        };
        let lo = with_fast(run_forecast(&lo_intake), &lo_intake);
        let hi = with_fast(run_forecast(&hi_intake), &hi_intake);
        for (d, w) in mid.iter().enumerate() {
            let widen = |edge: f64| ((edge - w).powi(2) + level_half.powi(2)).sqrt();
            points.push(Point {
                date: day_after(to, d as u64),
                value: *w,
                lower: Some(w - widen(lo[d])),
                upper: Some(w + widen(hi[d])),
            });
        }
    }
    let h_m = p.height_cm / 100.0;
    let under_kg = UNDERWEIGHT_BMI * h_m * h_m;
    // Still falling: the window's slope, its whole 95 % interval below zero (as the outcomes
    // module's low-BMI test reads the trend).
    let still_falling = cur
        .slope
        .is_some_and(|sl| sl.value < 0.0 && sl.upper.is_some_and(|u| u < 0.0));
    // How far below BMI 18.5 the central path (or the steady state) must go to be called
    // heading there: while the trend is falling, any distance (the fall is real, and the
    // crossing is where it leads); otherwise farther than the current trend weight's own 95 %
    // half-width, so that a weight steady on the line, whose path drifts a few grams under it
    // with a slope that cannot be told from zero, is not sent to a clinician. A woman of 1.60 m
    // steady at 47.4 kg (BMI 18.52, 0.04 kg above the line) read "the model expects weight to
    // fall below a BMI of 18.5 around 4 August 2026" (trend 47.38 kg, 47.29–47.46; the path
    // went 0.02 kg under the line, less than the 0.08 kg half-width). Program choice: the
    // trend's own uncertainty as the margin, as the forecast's band carries it (`level_half`).
    // The date named is still that of the crossing of 18.5 itself; no estimate moves.
    let margin = if still_falling { 0.0 } else { level_half };
    let underweight = cur.implied.filter(|_| cur.bw >= under_kg).and_then(|i| {
        let heads_under = points.iter().any(|pt| pt.value < under_kg - margin);
        let crosses = points
            .iter()
            .find(|pt| pt.value < under_kg)
            .map(|pt| pt.date)
            .filter(|_| heads_under);
        // The steady state, likewise: below the line at its central value while the trend
        // falls, otherwise only when its whole 95 % interval is (the same interval the
        // `steady_state_weight_kg` output gives: the current energy balance's uncertainty).
        // The woman above read "the model expects weight to settle in the end at about 47 kg
        // (104 lb), a BMI below 18.5" from a steady state of 47.27 kg (46.92–47.62).
        let settles_under = still_falling
            || p.model
                .steady_state_weight(i.value + Z_95 * cur.balance_sd, cur.met_h_window)
                .is_some_and(|upper| upper < under_kg);
        let rest = p
            .model
            .steady_state_weight(i.value, cur.met_h_window)
            .filter(|w| *w < under_kg && settles_under);
        (crosses.is_some() || rest.is_some()).then_some((crosses, rest))
    });
    let falls_further = cur
        .implied
        .filter(|_| cur.bw < under_kg)
        .and_then(|_| points.iter().min_by(|a, b| a.value.total_cmp(&b.value)))
        .filter(|low| {
            low.value <= cur.bw - FALLS_FURTHER_KG || (still_falling && low.value < cur.bw)
        })
        .map(|low| (low.date, low.value));
    // Like the steady state, a forecast that reaches a BMI below 16 (its path or the lower
    // edge of its band) is not shown: the model is not one of starvation, and a line drawn
    // into severe thinness is no forecast to give a participant.
    let min_kg = MIN_STEADY_STATE_BMI * h_m * h_m;
    if points
        .iter()
        .any(|pt| pt.value < min_kg || pt.lower.is_some_and(|l| l < min_kg))
    {
        points.clear();
    }
    let end = points.last().map(|pt| Band {
        value: pt.value,
        lower: pt.lower,
        upper: pt.upper,
    });
    let ss = |x: f64| {
        p.model
            .steady_state_weight(x, cur.met_h_window)
            .filter(|w| w / (h_m * h_m) >= MIN_STEADY_STATE_BMI)
    };
    // The steady state's interval comes from the current energy balance's uncertainty (the
    // baseline requirement cancels), as for the forecast.
    let steady = cur.implied.and_then(|i| {
        ss(i.value).map(|v| {
            (
                v,
                ss(i.value - Z_95 * cur.balance_sd),
                ss(i.value + Z_95 * cur.balance_sd),
            )
        })
    });
    Forecast {
        points,
        end,
        steady,
        underweight,
        falls_further,
        now_kg: cur.bw,
        severe_kg: min_kg,
        healthy_now: cur.bw < OVERWEIGHT_BMI * h_m * h_m,
    }
}

/// A weight a flag names, in kilograms and pounds ("about 51 kg (112 lb)"), as the `outcomes`
/// module's flags and the report's cautions write theirs: a flag's words are made here, without
/// the program's units, and "51 kg" alone was printed in a program whose reports are in pounds.
fn kg_lb(kg: f64, decimals: usize) -> String {
    format!(
        "{kg:.decimals$} kg ({:.decimals$} lb)",
        cohortpress_metric_api::units::Mass::from_kg(kg).lb()
    )
}

/// The flag for a forecast that heads below BMI 18.5 ([`Forecast::underweight`]): clinical when
/// the path crosses within the horizon, or when the steady state lies below BMI 16 (WHO severe
/// thinness: the implied intake is far below what the body needs at any healthy weight) for
/// someone of normal weight now (below BMI 25), a notice otherwise. Like the forecast, a flag
/// names no weight below BMI 16: the model is not one of starvation ("settle at about 29 kg"
/// was printed for a woman of 1.65 m).
fn push_underweight_flag(out: &mut ModuleOutput, fc: &Forecast) {
    if let Some((date, low)) = fc.falls_further {
        let to = if low < fc.severe_kg {
            "into severe thinness (a BMI below 16), where this model no longer applies,".into()
        } else if fc.now_kg - low < FALLS_FURTHER_KG {
            // Less than a kilogram: "to about 48 kg" from 48.3 read as no fall at all.
            format!("to about {}", kg_lb(low, 1))
        } else {
            format!("to about {}", kg_lb(low, 0))
        };
        out.push_flag(
            EnergyFlag::ForecastUnderweight.as_str(),
            FlagSeverity::Clinical,
            format!(
                "Weight is already in the underweight range (WHO: a BMI below 18.5), and if \
                 eating goes on as over the last weeks the model expects it to fall further, \
                 {to} around {}. Losing more is not a goal at that weight; please review this \
                 with a licensed clinician.",
                date.format("%-d %B %Y")
            ),
        );
        return;
    }
    let Some((crosses, rest)) = fc.underweight else {
        return;
    };
    // A notice is not for a clinician's list, so its words do not ask for one (they did, and
    // the report printed the request among the plain notices, not under "For review with a
    // licensed clinician"): for someone heavier now, a usual diet held for good ends below BMI
    // 18.5, and the notice says that intake is eased as weight nears its goal.
    // Someone of healthy weight now has no loss target to near (review: the notice spoke of
    // one): for them, losing more is not a goal at all.
    let eased = if fc.healthy_now {
        "Losing more is not a goal at a healthy weight: intake is usually raised to what keeps \
         the weight steady."
    } else {
        "Losing that far is not a goal: intake is usually raised towards maintenance as weight \
         nears its target."
    };
    if crosses.is_none()
        && let Some(w) = rest
        && w < fc.severe_kg
    {
        let (severity, close) = if fc.healthy_now {
            (
                FlagSeverity::Clinical,
                "Losing into that range is not a goal; please review this with a licensed \
                 clinician.",
            )
        } else {
            (FlagSeverity::Notice, eased)
        };
        out.push_flag(
            EnergyFlag::ForecastUnderweight.as_str(),
            severity,
            format!(
                "If eating goes on as over the last weeks, the model expects weight to keep \
                 falling, past the underweight range (WHO: a BMI below 18.5) into severe \
                 thinness (a BMI below 16), where this model no longer applies. {close}"
            ),
        );
        return;
    }
    let message = match (crosses, rest) {
        (Some(d), _) => format!(
            "If eating goes on as over the last weeks, the model expects weight to fall below a \
             BMI of 18.5 around {}, the underweight range (WHO). Losing more is not a goal at \
             that weight; please review this with a licensed clinician.",
            d.format("%-d %B %Y")
        ),
        (None, Some(w)) => format!(
            "If eating goes on as over the last weeks for good, the model expects weight to \
             settle in the end at about {}, a BMI below 18.5, the underweight range (WHO). \
             {eased}",
            kg_lb(w, 0)
        ),
        (None, None) => return,
    };
    let severity = if crosses.is_some() {
        FlagSeverity::Clinical
    } else {
        FlagSeverity::Notice
    };
    out.push_flag(EnergyFlag::ForecastUnderweight.as_str(), severity, message);
}

/// The forecast and body-composition outputs.
fn push_forecast(out: &mut ModuleOutput, p: &Person<'_>, start: &Start, fc: Forecast) {
    let end = fc.end;
    out.push_interval(
        names::FORECAST_WEIGHT_AT_END_KG,
        end.map(|b| b.value),
        end.and_then(|b| b.lower),
        end.and_then(|b| b.upper),
        "kg",
        "Forecast weight at the end of the forecast horizon (program end, or forecast_min_days past the period if later), implied intake and activity held (Hall et al. 2011 model)",
    );
    let steady = fc.steady;
    out.push_interval(
        names::STEADY_STATE_WEIGHT_KG,
        steady.map(|x| x.0),
        steady.and_then(|x| x.1),
        steady.and_then(|x| x.2),
        "kg",
        "Weight at which the model comes to rest with the implied intake held",
    );
    out.push_scalar(
        names::BODY_FAT_PERCENT_BASELINE,
        Some(start.bf0),
        "%",
        &format!("Baseline body fat: {}", start.bf_source.label()),
    );
    out.push_text(names::RMR_EQUATION, p.equation.code(), p.equation.label());
    out.push_text(
        names::BODY_FAT_SOURCE,
        start.bf_source.as_str(),
        start.bf_source.label(),
    );
    out.series.push(Series {
        name: names::FORECAST_WEIGHT.into(),
        unit: "kg".into(),
        step: "daily".into(),
        label: "Forecast weight (model, implied intake held; band from the intake interval)".into(),
        points: fc.points,
    });
}

/// The flag for logs far from the weight trend (whole gap interval beyond ±`GAP_FLAG_KCAL`).
fn push_gap_flag(out: &mut ModuleOutput, cur: &Current, window_days: u64) {
    let (Some(g), Some(l), Some(i)) = (gap(cur), cur.logged, cur.implied) else {
        return;
    };
    let beyond =
        g.lower.is_some_and(|x| x > GAP_FLAG_KCAL) || g.upper.is_some_and(|x| x < -GAP_FLAG_KCAL);
    if beyond {
        out.push_flag(
            EnergyFlag::LogsInconsistentWithTrend.as_str(),
            FlagSeverity::Notice,
            gap_flag_message(
                window_days,
                l,
                i.value,
                i.lower.unwrap_or(f64::NAN),
                i.upper.unwrap_or(f64::NAN),
            ),
        );
    }
}

/// The words of the logs-versus-trend flag, which the participant's report prints under
/// "Points to note": in the report's own unit words ("kcal a day", as its prose says; it read
/// "kcal/d" beside the energy table's "kcal/day"), over the window it is of (the outcomes
/// module's intake flags, printed beside it, average the period's logged days).
fn gap_flag_message(window_days: u64, logged: f64, implied: f64, lower: f64, upper: f64) -> String {
    format!(
        "Over the last {window_days} days, logged intake averages {logged:.0} kcal a day, while the weight trend implies about \
         {implied:.0} kcal a day (95 % interval {lower:.0} to {upper:.0}). Food logs often \
         differ from what the weight trend shows (Archer et al. 2013); this is worth a \
         conversation about logging, not a judgement."
    )
}

/// How fast this person's implied intake has moved so far, kcal/d per day: successive
/// `window`-day blocks ending at `to`, the mean of (difference² − its noise variance) over
/// pairs of blocks, square-rooted and divided by the block length (0 with fewer than two
/// blocks).
fn intake_movement_per_day(p: &Person<'_>, enrolled: NaiveDate, to: NaiveDate, window: u64) -> f64 {
    let mut blocks: Vec<(f64, f64)> = Vec::new();
    let mut end = to;
    loop {
        let from = day_before(end, window - 1);
        if from < enrolled {
            break;
        }
        let (Some(sl), Some(w)) = (
            window_slope(&p.trend, from, end),
            mean_band(&p.trend.level, from, end),
        ) else {
            break;
        };
        if (p.trend.slope.range(from..=end).count() as u64) < window / 2 {
            break;
        }
        let sd = match (sl.lower, sl.upper) {
            (Some(l), Some(u)) => (u - l).abs() / (2.0 * Z_95),
            _ => 0.0,
        };
        let i = p.implied_intake(w.value, sl.value, p.activity_met_hours(from, end));
        blocks.push((i, (p.lin.rho * sd).powi(2)));
        end = day_before(from, 1);
    }
    if blocks.len() < 2 {
        return 0.0;
    }
    let excess: Vec<f64> = blocks
        .windows(2)
        .map(|b| ((b[0].0 - b[1].0).powi(2) - b[0].1 - b[1].1).max(0.0))
        .collect();
    (excess.iter().sum::<f64>() / excess.len() as f64).sqrt() / window as f64
}

/// Outputs with every value missing (no weigh-ins at all), so the report still finds them.
fn push_empty(out: &mut ModuleOutput, s: &Settings) {
    for (name, unit) in [
        (names::RMR_KCAL_PER_DAY, "kcal/d"),
        (names::ACTIVITY_NET_KCAL_PER_DAY, "kcal/d"),
        (names::TDEE_KCAL_PER_DAY, "kcal/d"),
        (names::LOGGED_INTAKE_KCAL_PER_DAY, "kcal/d"),
        (names::LOGGED_DAYS, "d"),
        (names::IMPLIED_INTAKE_KCAL_PER_DAY, "kcal/d"),
        (names::INTAKE_GAP_KCAL_PER_DAY, "kcal/d"),
        (names::ENERGY_BALANCE_KCAL_PER_DAY, "kcal/d"),
        (names::FORECAST_WEIGHT_AT_END_KG, "kg"),
        (names::STEADY_STATE_WEIGHT_KG, "kg"),
        (names::BODY_FAT_PERCENT_BASELINE, "%"),
    ] {
        out.push_scalar(name, None, unit, "not available: no weigh-ins");
    }
    out.push_text(names::RMR_EQUATION, s.equation.code(), s.equation.label());
    out.push_text(
        names::BODY_FAT_SOURCE,
        BodyFatSource::None.as_str(),
        BodyFatSource::None.label(),
    );
    out.series.push(Series {
        name: names::FORECAST_WEIGHT.into(),
        unit: "kg".into(),
        step: "daily".into(),
        label: "Forecast weight".into(),
        points: vec![],
    });
    out.tables.push(empty_table::<WeekEnergyRow>(
        names::WEEKLY_ENERGY,
        WEEKLY_ENERGY_LABEL,
    ));
    out.tables
        .push(empty_table::<OptionRow>(names::OPTIONS, OPTIONS_LABEL));
    out.tables.push(empty_table::<PlateauRow>(
        names::PLATEAU_ASSESSMENT,
        PLATEAU_ASSESSMENT_LABEL,
    ));
}

/// One row per week from enrolment to the end of the period (weeks start on the enrolment
/// weekday; the last week may be short).
fn weekly_table(p: &Person<'_>, enrolled: NaiveDate, to: NaiveDate) -> Table {
    let mut t = empty_table::<WeekEnergyRow>(names::WEEKLY_ENERGY, WEEKLY_ENERGY_LABEL);
    // Monday-based weeks, like the adherence module's, so a report shows one week grid; the
    // first week starts at enrolment and the last ends at the period end.
    let monday =
        enrolled - chrono::Duration::days(i64::from(enrolled.weekday().num_days_from_monday()));
    let mut week_start = monday;
    while week_start <= to {
        let ws = week_start.max(enrolled);
        let we = day_after(week_start, 6).min(to);
        let bw = mean_band(&p.trend.level, ws, we)
            .map(|b| b.value)
            .or_else(|| p.weight_on(we));
        // The person's activity level (after the logs and the trend), as the summary's
        // expenditure uses: with the prior `base_pal` the weeks showed a different energy use
        // from the summary's for the same days.
        let expenditure = bw.map(|w| p.rmr_at(w, ws) * p.model.pal + p.activity_kcal(ws, we, w));
        let (logged, _) = p.logged(ws, we);
        let implied = match (bw, mean_band(&p.trend.slope, ws, we)) {
            // Below zero or above what a person can take in, the week's change is not energy
            // balance (see `current_state`).
            (Some(w), Some(sl)) => {
                Some(p.implied_intake(w, sl.value, p.activity_met_hours(ws, we)))
                    .filter(|x| p.implausible(w, we, *x).is_none())
            }
            _ => None,
        };
        t.rows.push(
            WeekEnergyRow {
                week_start,
                expenditure_kcal_per_day: expenditure,
                logged_intake_kcal_per_day: logged,
                implied_intake_kcal_per_day: implied,
            }
            .write(),
        );
        week_start = day_after(week_start, 7);
    }
    t
}

/// The `options` table. With s the current slope and s* = −target/7 (kg/d):
///
/// Refusals: a target above `max_safe_loss_kg_per_week` (0.5–1 kg/week, NIH/NHLBI 1998 clinical
/// guidelines — from memory); a resulting intake below the floor (1200 women / 1500 men:
/// common practice, aligned with the lower bound of the AHA/ACC/TOS 2013 prescription; no
/// single formal source, from memory); walking above 120 min/d (common practice).
///
/// - intake: ΔEI = ρ·(s* − s). At the current weight ε·ΔBW is unchanged, so only the rate term
///   moves; the new rate is the starting rate and slows as weight falls.
/// - walking: net kcal = (1 − β)·ρ·(s − s*), because in the model exercise is not offset by the
///   thermic effect or adaptive thermogenesis; minutes = kcal / ((MET − 1)·kg/60).
/// - combined ("some of each"): the cut [`crate::view::combined_intake_cut`] (half of −ΔEI,
///   within the floor at the careful end of the intake: the implied intake's lower bound, or
///   `logged` when lower), and the walking minutes for the rest, as the report offers it.
fn options_table(
    p: &Person<'_>,
    s: &Settings,
    bw: f64,
    slope: Option<Band>,
    implied: Option<Band>,
    logged: Option<f64>,
) -> Table {
    let mut t = empty_table::<OptionRow>(names::OPTIONS, OPTIONS_LABEL);
    let (Some(sl), Some(imp)) = (slope, implied) else {
        for (kind, unit) in [
            (OptionKind::Intake, "kcal/d"),
            (OptionKind::Walking, "min/d"),
            (OptionKind::Combined, "min/d"),
        ] {
            t.rows.push(
                OptionRow {
                    kind,
                    change_per_day: None,
                    unit: unit.into(),
                    resulting_intake_kcal_per_day: None,
                    feasible: false,
                    reason: "Not enough recent weigh-ins to estimate the current energy balance."
                        .into(),
                }
                .write(),
            );
        }
        return t;
    };
    let target_slope = -s.target_loss / 7.0;
    let too_fast = s.target_loss > s.max_safe_loss;
    let fast_reason = format!(
        "The target of {:.2} kg/week is faster than {:.2} kg/week, the usual safe maximum \
         (NIH/NHLBI 1998 guidelines).",
        s.target_loss, s.max_safe_loss
    );
    let already = sl.value <= target_slope;
    let already_reason = "The current trend already meets the target rate; no change is needed.";

    // Intake option.
    let d_ei = if already {
        0.0
    } else {
        p.lin.rho * (target_slope - sl.value)
    };
    let new_intake = imp.value + d_ei;
    // Checked on the uncertain side, the careful end of the intake (one for this row and the
    // `combined` row below): the person may already eat as little as the lower bound of the
    // implied intake, or as their food log says when that is lower (a participant measures
    // "less than now" against their own log). Before, this row was checked at the lower bound
    // only, while the `combined` row and the report also checked the log.
    let low = imp.lower.unwrap_or(imp.value);
    let careful = crate::view::careful_intake(low, logged);
    let by_log = careful < low;
    let careful_words = if by_log {
        "the food log"
    } else {
        "the low end of the estimate"
    };
    let new_intake_low = careful + d_ei;
    let floor = p.floor(s);
    let (feasible, reason) = if too_fast {
        (false, fast_reason.clone())
    } else if new_intake < floor {
        (
            false,
            format!(
                "It would bring intake to about {new_intake:.0} kcal a day, below {floor:.0} kcal \
                 a day; intakes that low need a clinician's supervision."
            ),
        )
    } else if new_intake_low < floor {
        (
            false,
            format!(
                "It would bring intake to about {new_intake:.0} kcal a day, but possibly to \
                 {new_intake_low:.0} ({}), below {floor:.0} kcal a day; intakes that low need \
                 a clinician's supervision.",
                if by_log {
                    "by the food log"
                } else {
                    "the low end of the estimate"
                }
            ),
        )
    } else if already {
        (true, already_reason.to_string())
    } else {
        (
            true,
            format!(
                "Eating about {:.0} kcal/d less than now would start a loss of {:.2} kg/week at \
                 the current weight; the rate then slows as weight falls.",
                -d_ei, s.target_loss
            ),
        )
    };
    t.rows.push(
        OptionRow {
            kind: OptionKind::Intake,
            change_per_day: Some(d_ei),
            unit: "kcal/d".into(),
            resulting_intake_kcal_per_day: Some(new_intake),
            feasible,
            reason,
        }
        .write(),
    );

    // Walking option.
    let kcal_per_min = (s.walking_met - 1.0).max(0.0) * bw / 60.0;
    let net_needed = if already {
        0.0
    } else {
        (1.0 - BETA) * p.lin.rho * (sl.value - target_slope)
    };
    let minutes = if kcal_per_min > 0.0 {
        net_needed / kcal_per_min
    } else {
        f64::INFINITY
    };
    let (feasible, reason) = if too_fast {
        (false, fast_reason.clone())
    } else if minutes > s.max_walk_minutes {
        (
            false,
            format!(
                "It would take about {minutes:.0} minutes of walking a day, more than {:.0}; \
                 combine a shorter walk with a smaller change in intake.",
                s.max_walk_minutes
            ),
        )
    } else if already {
        (true, already_reason.to_string())
    } else {
        (
            true,
            format!(
                "About {minutes:.0} extra minutes a day of walking at {:.1} MET (about 3 mph, \
                 Compendium 2011 code 17190) adds {net_needed:.0} kcal/d net of resting.",
                s.walking_met
            ),
        )
    };
    t.rows.push(
        OptionRow {
            kind: OptionKind::Walking,
            change_per_day: Some(minutes),
            unit: "min/d".into(),
            resulting_intake_kcal_per_day: Some(imp.value),
            feasible,
            reason,
        }
        .write(),
    );

    // Some of each: half the change from intake, never past the floor at the careful end of the
    // intake, the rest from walking (same model terms as the two rows above). The report's
    // "Some of each" is this row, its amounts rounded; before, the row was made only when eating
    // less alone failed the floor, and cut down to the floor, while the report offered its own
    // split to more people (sample program, 1 Oct 2026: SG-004, SG-039 and SG-045 read "Some of
    // each" with no `combined` row in metrics/tables.csv).
    let need = -d_ei;
    let cut = crate::view::combined_intake_cut(need, careful, floor);
    let rest_kcal = (need - cut).max(0.0);
    let rest_minutes = if rest_kcal == 0.0 {
        0.0
    } else if kcal_per_min > 0.0 {
        (1.0 - BETA) * rest_kcal / kcal_per_min
    } else {
        f64::INFINITY
    };
    // The intake it leads to, and the floor where it belongs: at the careful end ("down to
    // 1500" beside a resulting intake of 2505 read as "eat 1500 kcal a day").
    let (feasible, reason) = if too_fast {
        (false, fast_reason)
    } else if already {
        (true, already_reason.to_string())
    } else if cut <= 0.0 {
        (
            false,
            format!(
                "No room to eat less: {careful_words}, {careful:.0} kcal a day, is already at \
                 or below {floor:.0}; walking alone is the walking row."
            ),
        )
    } else if rest_minutes > s.max_walk_minutes {
        (
            false,
            format!(
                "Even eating about {cut:.0} kcal a day less (to about {:.0} kcal a day, {:.0} by \
                 {careful_words}), it would take about {rest_minutes:.0} minutes of walking a \
                 day, more than {:.0}; a slower target rate is more realistic.",
                imp.value - cut,
                careful - cut,
                s.max_walk_minutes
            ),
        )
    } else {
        (
            true,
            format!(
                "Eating about {cut:.0} kcal a day less (to about {:.0} kcal a day, {:.0} by \
                 {careful_words}, at or above {floor:.0}) and walking about {rest_minutes:.0} \
                 minutes more a day together restore a loss of {:.2} kg/week.",
                imp.value - cut,
                careful - cut,
                s.target_loss
            ),
        )
    };
    t.rows.push(
        OptionRow {
            kind: OptionKind::Combined,
            change_per_day: Some(rest_minutes),
            unit: "min/d".into(),
            resulting_intake_kcal_per_day: Some(imp.value - cut),
            feasible,
            reason,
        }
        .write(),
    );
    t
}

/// The `plateau_assessment` table: one row per `plateau` period of the trend output.
///
/// # Method
/// - **Early intake**: the intake implied over days 7–34 after enrolment (after the diet's fast
///   glycogen/water drop); when the plateau starts earlier than day 35, over enrolment to the
///   day before the plateau with the fast drop taken out
///   ([`Person::implied_intake_from_start`]).
/// - **During**: the intake implied over the whole plateau (its exact slope interval from the
///   trend's `periods` table; the first `window_days` days when the period is shorter than 28).
/// - **Change** = during − early = ε·(BW_d − BW_e) + ρ·(s_d − s_e): the baseline requirement
///   cancels, so its 95 % interval carries only the two slopes' uncertainty (their bands, which
///   include correlated scatter) and the model's ρ and ε.
/// - **Expected slope**: the linearised model's slope at the plateau's starting weight with the
///   early intake held (Hall & Chow 2011).
/// - `intake_drift` when the change's interval lies above zero and the change is at least
///   `drift_threshold_kcal_per_day`; `expected_slowdown` when it
///   does not and the expected slope lies inside the plateau band (the model at the earlier
///   intake predicts the stall); `undetermined` otherwise (neither shown), or when the early
///   window is too short (< 14 days).
fn plateau_table(p: &Person<'_>, s: &Settings, enrolled: NaiveDate) -> Table {
    let mut t = empty_table::<PlateauRow>(names::PLATEAU_ASSESSMENT, PLATEAU_ASSESSMENT_LABEL);
    let sd_of = |b: &Band| match (b.lower, b.upper) {
        (Some(l), Some(u)) => (u - l).abs() / (2.0 * Z_95),
        _ => 0.0,
    };
    for per in p
        .trend
        .periods
        .iter()
        .filter(|x| x.kind == PeriodKind::Plateau)
    {
        // The whole plateau, with the trend's exact slope interval for it when the period
        // gives one (a longer window measures the intake during the plateau more precisely).
        let during_to = per.end;
        let during_slope = match (per.slope_wk, per.lower_wk, per.upper_wk) {
            (Some(m), Some(l), Some(u)) if days_incl(per.start, per.end) >= 28 => Some(Band {
                value: m / 7.0,
                lower: Some(l / 7.0),
                upper: Some(u / 7.0),
            }),
            _ => window_slope(
                &p.trend,
                per.start,
                day_after(per.start, s.window_days - 1).min(per.end),
            ),
        };
        let observed_wk = per.slope_wk.or(during_slope.map(|x| x.value * 7.0));
        let bw_start = per.weight_start.or_else(|| p.weight_on(per.start));
        let bw_during = mean_band(&p.trend.level, per.start, during_to)
            .map(|b| b.value)
            .or(bw_start);
        let met_during = p.activity_met_hours(per.start, during_to);
        let during = match (bw_during, during_slope) {
            (Some(w), Some(sl)) => Some((
                p.implied_intake(w, sl.value, met_during),
                w,
                sl.value,
                sd_of(&sl),
            )),
            _ => None,
        }
        // An intake that cannot be energy balance is no evidence of a cause (`current_state`).
        .filter(|d| p.implausible(d.1, during_to, d.0).is_none());
        // Early window.
        let d7 = day_after(enrolled, 7);
        let d34 = day_after(enrolled, 34);
        let (e_from, e_to, from_start) = if per.start > d34 {
            (d7, d34, false)
        } else {
            (enrolled, day_before(per.start, 1), true)
        };
        let early = if days_incl(e_from, e_to) >= 14 {
            match (
                mean_band(&p.trend.level, e_from, e_to),
                window_slope(&p.trend, e_from, e_to),
            ) {
                (Some(w), Some(sl)) => {
                    let met = p.activity_met_hours(e_from, e_to);
                    let i = if from_start {
                        p.implied_intake_from_start(
                            w.value,
                            sl.value,
                            met,
                            days_incl(e_from, e_to) as f64,
                        )
                    } else {
                        p.implied_intake(w.value, sl.value, met)
                    };
                    Some((i, w.value, sl.value, sd_of(&sl)))
                        .filter(|e| p.implausible(e.1, e_to, e.0).is_none())
                }
                _ => None,
            }
        } else {
            None
        };
        let change = match (early, during) {
            (Some(e), Some(d)) => {
                let diff = d.0 - e.0;
                let var = (p.lin.rho * d.3).powi(2)
                    + (p.lin.rho * e.3).powi(2)
                    + (RHO_REL_SD * p.lin.rho * (d.2 - e.2)).powi(2)
                    + (EPS_REL_SD * p.lin.epsilon * (d.1 - e.1)).powi(2);
                let h = Z_95 * var.sqrt();
                Some((diff, diff - h, diff + h))
            }
            _ => None,
        };
        let expected = match (early, bw_start) {
            (Some(e), Some(w)) => Some((p.expected_slope(w, e.0, met_during), e.3)),
            _ => None,
        };
        let expected_wk = expected.map(|x| x.0 * 7.0);
        let band_half = bw_start.unwrap_or(p.model.bw0) * PLATEAU_BAND_FRACTION_PER_WEEK / 7.0;
        let classification = match (change, expected) {
            (Some((c, lo, _)), _) if lo > 0.0 && c >= s.drift_threshold => {
                PlateauCause::IntakeDrift
            }
            (Some(_), Some((ex, _))) if ex >= -band_half => PlateauCause::ExpectedSlowdown,
            _ => PlateauCause::Undetermined,
        };
        let f0 = |x: Option<f64>| x.map_or("n/a".to_string(), |v| format!("{v:.0}"));
        let f2 = |x: Option<f64>| x.map_or("n/a".to_string(), |v| format!("{v:+.2}"));
        let evidence = format!(
            "Implied intake {} kcal/d early in the program and {} during the plateau: change {} \
             (95 % interval {} to {}); at the early intake the model expects {} kg/week at {} kg \
             (plateau band ±{:.2}); observed {} kg/week.",
            f0(early.map(|e| e.0)),
            f0(during.map(|d| d.0)),
            change.map_or("n/a".to_string(), |c| format!("{:+.0}", c.0)),
            f0(change.map(|c| c.1)),
            f0(change.map(|c| c.2)),
            f2(expected_wk),
            bw_start.map_or("n/a".to_string(), |w| format!("{w:.1}")),
            band_half * 7.0,
            f2(observed_wk),
        );
        t.rows.push(
            PlateauRow {
                start: per.start,
                end: per.end,
                observed_slope_kg_per_week: observed_wk,
                expected_slope_kg_per_week: expected_wk,
                implied_intake_before_kcal_per_day: early.map(|e| e.0),
                implied_intake_during_kcal_per_day: during.map(|d| d.0),
                classification,
                evidence,
                intake_change_kcal_per_day: change.map(|c| c.0),
                intake_change_lower_kcal_per_day: change.map(|c| c.1),
                intake_change_upper_kcal_per_day: change.map(|c| c.2),
            }
            .write(),
        );
    }
    t
}

mod baseline;

#[cfg(test)]
mod tests;

//! What [`crate::EnergyModule::compute`] does with one participant's data and the `trend`
//! module's output.
//!
//! Definitions used throughout (the report and the tidy outputs rely on them):
//!
//! - **Baseline**: body weight BW₀ = the trend level on the first trend day (else the first
//!   weigh-in); age at enrolment; body fat from the profile (`measured`) or Jackson et al. 2002
//!   (`jackson_2002`); RMR₀ by the chosen equation; maintenance intake EI₀ = RMR₀ × `base_pal`.
//!   Logged exercise is treated as *added* by the program on top of `base_pal`.
//! - **Expenditure** (static): TDEE = RMR(current weight, current age) × `base_pal` + net
//!   activity (MET − 1)·kg·h per day. Net, because `base_pal` already counts resting energy for
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
use chrono::Datelike as _;
use chrono::{Days, NaiveDate};
use cohortpress_metric_api::{
    Cell, Column, FlagSeverity, ModuleContext, ModuleError, ModuleOutput, ParticipantData, Point,
    Series, Sex, Table,
};
use std::collections::BTreeMap;

/// β = β_TEF + β_AT: the part of an intake change the body gives back (Hall et al. 2011).
const BETA: f64 = BETA_TEF + BETA_AT;
/// Logged days needed for a mean logged intake.
const MIN_LOGGED_DAYS: usize = 4;
/// Gap beyond which (whole 95 % interval) logs are called inconsistent with the trend, kcal/d.
const GAP_FLAG_KCAL: f64 = 300.0;
/// Walking cap of the options table, min/d (common practice).
const MAX_WALK_MIN: f64 = 120.0;
/// Half-width of the plateau band as a fraction of body weight per week (REFERENCE §7.3,
/// program configuration rather than a literature constant).
const PLATEAU_BAND_FRACTION_PER_WEEK: f64 = 0.0025;

struct Settings {
    equation: RestingEquation,
    base_pal: f64,
    window_days: u64,
    target_loss: f64,
    max_safe_loss: f64,
    floor_female: f64,
    floor_male: f64,
    drift_threshold: f64,
    walking_met: f64,
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
            base_pal: ctx.setting_f64("base_pal", 1.4),
            window_days: ctx.setting_f64("window_days", 28.0).round().max(1.0) as u64,
            target_loss: ctx.setting_f64("target_loss_kg_per_week", 0.5),
            max_safe_loss: ctx.setting_f64("max_safe_loss_kg_per_week", 1.0),
            floor_female: ctx.setting_f64("intake_floor_female", 1200.0),
            floor_male: ctx.setting_f64("intake_floor_male", 1500.0),
            drift_threshold: ctx.setting_f64("drift_threshold_kcal_per_day", 150.0),
            walking_met: ctx.setting_f64("walking_met", 3.5),
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
    kind: String,
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
    periods: Vec<TrendPeriod>,
}

fn series_map(out: &ModuleOutput, name: &str, to: NaiveDate) -> BTreeMap<NaiveDate, Band> {
    out.series(name)
        .map(|s| {
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
        })
        .unwrap_or_default()
}

fn parse_trend(out: &ModuleOutput, to: NaiveDate) -> Trend {
    let mut t = Trend {
        level: series_map(out, "weight_trend", to),
        slope: series_map(out, "weight_slope", to),
        periods: vec![],
    };
    if let Some(table) = out.table("periods") {
        let idx = |n: &str| table.columns.iter().position(|c| c.name == n);
        let text = |row: &[Cell], n: &str| match idx(n).and_then(|i| row.get(i)) {
            Some(Cell::Text(s)) => Some(s.clone()),
            _ => None,
        };
        let num = |row: &[Cell], n: &str| match idx(n).and_then(|i| row.get(i)) {
            Some(Cell::Number(x)) if x.is_finite() => Some(*x),
            _ => None,
        };
        let date = |row: &[Cell], n: &str| {
            text(row, n).and_then(|s| NaiveDate::parse_from_str(&s, "%Y-%m-%d").ok())
        };
        for row in &table.rows {
            let (Some(kind), Some(start), Some(end)) =
                (text(row, "kind"), date(row, "start"), date(row, "end"))
            else {
                continue;
            };
            if start > to {
                continue;
            }
            t.periods.push(TrendPeriod {
                kind,
                start,
                end: end.min(to),
                slope_wk: num(row, "slope_kg_per_week"),
                lower_wk: num(row, "slope_lower_kg_per_week"),
                upper_wk: num(row, "slope_upper_kg_per_week"),
                weight_start: num(row, "weight_start_kg"),
            });
        }
    }
    t
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

/// Everything about the person the formulas need.
struct Person<'a> {
    data: &'a ParticipantData,
    sex: Sex,
    height_cm: f64,
    equation: RestingEquation,
    model: HallModel,
    lin: LinearisedModel,
    trend: Trend,
}

impl Person<'_> {
    /// Resting energy at body weight `bw` on day `d`. Lean-mass equations get the lean mass of
    /// the Forbes curve through the measured baseline composition.
    fn rmr_at(&self, bw: f64, d: NaiveDate) -> f64 {
        let lean = self
            .equation
            .needs_lean_mass()
            .then(|| self.model.lean_for_fat(self.model.fat_for_weight(bw)));
        let age = self.data.profile.age_on(d);
        self.equation
            .resting_energy(self.sex, bw, self.height_cm, age, lean)
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

    fn floor(&self, s: &Settings) -> f64 {
        match self.sex {
            Sex::Female => s.floor_female,
            Sex::Male => s.floor_male,
        }
    }
}

fn num(x: Option<f64>) -> Cell {
    match x {
        Some(v) if v.is_finite() => Cell::Number(v),
        _ => Cell::Empty,
    }
}

fn text(s: impl Into<String>) -> Cell {
    Cell::Text(s.into())
}

/// Computes the module's output (see the module docs for every definition).
pub(crate) fn run(
    ctx: &ModuleContext,
    data: &ParticipantData,
) -> Result<ModuleOutput, ModuleError> {
    let s = Settings::from_ctx(ctx)?;
    let mut out = ModuleOutput::default();
    let to = ctx.period.to;
    let enrolled = data.profile.enrolled;
    let period_from = ctx.period.from.max(enrolled);
    let trend_out = ctx.earlier.get("trend");
    let trend = trend_out.map(|o| parse_trend(o, to)).unwrap_or_default();
    if trend_out.is_none() {
        out.push_flag(
            "insufficient_data",
            FlagSeverity::Info,
            "The weight trend was not available, so the energy estimates use a straight-line \
             fit of the weigh-ins where there were enough of them.",
        );
    }

    // Baseline.
    let bw0 = trend.level.values().next().map(|b| b.value).or_else(|| {
        data.weights
            .iter()
            .find(|w| w.date <= to)
            .map(|w| w.weight.kg())
    });
    let Some(bw0) = bw0 else {
        out.push_flag(
            "insufficient_data",
            FlagSeverity::Info,
            "No weigh-ins up to the end of this period, so no energy estimates could be made.",
        );
        push_empty(&mut out, &s);
        return Ok(out);
    };
    let sex = data.profile.sex;
    let height_cm = data.profile.height.cm();
    let age0 = data.profile.age_on(enrolled);
    let (bf0, bf_source, bf_label) = match data.profile.body_fat_percent {
        Some(bf) => (bf, "measured", "Measured (from the profile)"),
        None => (
            jackson_2002_body_fat(
                sex,
                data.bmi(cohortpress_metric_api::units::Mass::from_kg(bw0)),
                age0,
            ),
            "jackson_2002",
            "Estimated from BMI, age and sex (Jackson et al. 2002)",
        ),
    };
    // The model needs a positive fat mass (ln F/F₀); an estimate outside 3–70 % (e.g. Jackson's
    // equation at a very low BMI) is held to that range, and the value used is the one reported.
    let bf0 = bf0.clamp(3.0, 70.0);
    let fm0 = bw0 * bf0 / 100.0;
    let mut equation = s.equation;
    if equation.needs_lean_mass() && data.profile.body_fat_percent.is_none() {
        out.push_flag(
            "equation_fallback",
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
    let rmr0 = equation.resting_energy(sex, bw0, height_cm, age0, lean0);
    let model = HallModel::new(bw0, fm0, rmr0, s.base_pal);
    let lin = LinearisedModel::from_baseline(bw0, fm0, rmr0, s.base_pal);
    let p = Person {
        data,
        sex,
        height_cm,
        equation,
        model,
        lin,
        trend,
    };

    // Current state.
    let window_from = day_before(to, s.window_days - 1).max(enrolled);
    let fallback = if trend_out.is_none() {
        ols_fallback(data, window_from, to)
    } else {
        None
    };
    let bw_cur = match &fallback {
        Some(fit) => fit.level_end,
        None => p.weight_on(to).unwrap_or(bw0),
    };
    // The mean slope over the window pairs with the mean level over the window: the linear
    // estimator then gives the mean intake over the window (pairing it with the end weight would
    // read a decelerating loss as a lower intake).
    let bw_window = match &fallback {
        Some(fit) => fit.level_mean,
        None => mean_band(&p.trend.level, window_from, to).map_or(bw_cur, |b| b.value),
    };
    let slope: Option<Band> = match &fallback {
        Some(fit) => Some(fit.slope),
        None => mean_band(&p.trend.slope, window_from, to)
            // Require most of the window to be covered, so a few days do not pass for a month.
            .filter(|_| {
                p.trend.slope.range(window_from..=to).count() as i64
                    >= days_incl(window_from, to).min(s.window_days as i64) / 2
            }),
    };
    if slope.is_none() && trend_out.is_some() {
        out.push_flag(
            "insufficient_data",
            FlagSeverity::Info,
            format!(
                "The weight trend does not cover enough of the last {} days, so the intake \
                 implied by the weight trend, the forecast and the options could not be computed.",
                s.window_days
            ),
        );
    }

    let rmr = p.rmr_at(bw_cur, to);
    let activity = p.activity_kcal(period_from, to, bw_cur);
    let tdee = rmr * s.base_pal + activity;
    let (logged_mean, logged_days) = p.logged(period_from, to);
    let logged = logged_mean.filter(|_| logged_days >= MIN_LOGGED_DAYS);
    let met_h_window = p.activity_met_hours(window_from, to);
    let implied: Option<Band> =
        slope.map(|sl| sl.map(|x| p.implied_intake(bw_window, x, met_h_window)));

    out.push_scalar(
        "rmr_kcal_per_day",
        Some(rmr),
        "kcal/d",
        &format!("Resting energy ({})", equation.label()),
    );
    out.push_scalar(
        "activity_net_kcal_per_day",
        Some(activity),
        "kcal/d",
        "Logged activity, net of resting ((MET − 1) × kg × h), added to the resting-based total",
    );
    out.push_scalar(
        "tdee_kcal_per_day",
        Some(tdee),
        "kcal/d",
        &format!("Total expenditure: resting × {} + net activity", s.base_pal),
    );
    out.push_scalar(
        "logged_intake_kcal_per_day",
        logged,
        "kcal/d",
        "Logged intake, mean of logged days",
    );
    out.push_scalar(
        "logged_days",
        Some(logged_days as f64),
        "d",
        "Days with a food log",
    );
    out.push_interval(
        "implied_intake_kcal_per_day",
        implied.map(|b| b.value),
        implied.and_then(|b| b.lower),
        implied.and_then(|b| b.upper),
        "kcal/d",
        "Intake implied by the weight trend (Hall & Chow 2011), 95 % interval",
    );
    let gap = match (implied, logged) {
        (Some(i), Some(l)) => Some(i.map(|x| x - l)),
        _ => None,
    };
    out.push_interval(
        "intake_gap_kcal_per_day",
        gap.map(|b| b.value),
        gap.and_then(|b| b.lower),
        gap.and_then(|b| b.upper),
        "kcal/d",
        "Implied minus logged intake (positive: more eaten than logged)",
    );
    let balance = implied.map(|i| i.map(|x| x - tdee));
    out.push_interval(
        "energy_balance_kcal_per_day",
        balance.map(|b| b.value),
        balance.and_then(|b| b.lower),
        balance.and_then(|b| b.upper),
        "kcal/d",
        "Energy balance: implied intake minus expenditure at the current weight",
    );

    // Forecast and steady state.
    // To the program end, but never shorter than `forecast_min_days`: in a program's last month
    // a forecast "to the end" would have no horizon at all.
    let horizon = (ctx.program.end - to).num_days().max(s.forecast_min_days);
    let run_forecast = |intake: f64| -> Vec<f64> {
        let start = p.model.state_at_weight(bw_cur, intake);
        p.model
            .simulate_from(start, horizon.max(0) as usize, |_| intake, |_| met_h_window)
            .iter()
            .map(|st| p.model.weight(st))
            .collect()
    };
    let mut forecast_points = vec![];
    let mut forecast_end: Option<Band> = None;
    if let (Some(i), true) = (implied, horizon > 0) {
        let mid = run_forecast(i.value);
        let lo = i.lower.map(&run_forecast);
        let hi = i.upper.map(&run_forecast);
        for (d, w) in mid.iter().enumerate() {
            forecast_points.push(Point {
                date: day_after(to, d as u64),
                value: *w,
                lower: lo.as_ref().map(|v| v[d]),
                upper: hi.as_ref().map(|v| v[d]),
            });
        }
        forecast_end = forecast_points.last().map(|pt| Band {
            value: pt.value,
            lower: pt.lower,
            upper: pt.upper,
        });
    }
    out.push_interval(
        "forecast_weight_at_end_kg",
        forecast_end.map(|b| b.value),
        forecast_end.and_then(|b| b.lower),
        forecast_end.and_then(|b| b.upper),
        "kg",
        "Forecast weight at the end of the forecast horizon (program end, or forecast_min_days past the period if later), implied intake and activity held (Hall et al. 2011 model)",
    );
    let ss = |x: f64| p.model.steady_state_weight(x, met_h_window);
    let steady =
        implied.and_then(|i| ss(i.value).map(|v| (v, i.lower.and_then(ss), i.upper.and_then(ss))));
    out.push_interval(
        "steady_state_weight_kg",
        steady.map(|x| x.0),
        steady.and_then(|x| x.1),
        steady.and_then(|x| x.2),
        "kg",
        "Weight at which the model comes to rest with the implied intake held",
    );
    out.push_scalar(
        "body_fat_percent_baseline",
        Some(bf0),
        "%",
        &format!("Baseline body fat: {bf_label}"),
    );
    out.push_text("rmr_equation", equation.code(), equation.label());
    out.push_text("body_fat_source", bf_source, bf_label);
    out.series.push(Series {
        name: "forecast_weight".into(),
        unit: "kg".into(),
        step: "daily".into(),
        label: "Forecast weight (model, implied intake held; band from the intake interval)".into(),
        points: forecast_points,
    });

    // After a withdrawal there are no habits to estimate: the weekly table stops there.
    let weekly_to = data.profile.withdrew.map_or(to, |w| w.min(to));
    out.tables.push(weekly_table(&p, &s, enrolled, weekly_to));
    out.tables
        .push(options_table(&p, &s, bw_cur, slope, implied));
    out.tables.push(plateau_table(&p, &s, enrolled));

    // Flags.
    if let (Some(g), Some(l), Some(i)) = (gap, logged, implied) {
        let beyond = g.lower.is_some_and(|x| x > GAP_FLAG_KCAL)
            || g.upper.is_some_and(|x| x < -GAP_FLAG_KCAL);
        if beyond {
            out.push_flag(
                "logs_inconsistent_with_trend",
                FlagSeverity::Notice,
                format!(
                    "Logged intake averages {l:.0} kcal/d, while the weight trend implies about \
                     {:.0} kcal/d (95 % interval {:.0} to {:.0}). Food logs often differ from \
                     what the weight trend shows (Archer et al. 2013); this is worth a \
                     conversation about logging, not a judgement.",
                    i.value,
                    i.lower.unwrap_or(f64::NAN),
                    i.upper.unwrap_or(f64::NAN)
                ),
            );
        }
    }
    // Logged intakes below the usual floors are flagged by the outcomes module, which owns the
    // safety flags; this module only refuses to recommend going below them.
    Ok(out)
}

/// Outputs with every value missing (no weigh-ins at all), so the report still finds them.
fn push_empty(out: &mut ModuleOutput, s: &Settings) {
    for (name, unit) in [
        ("rmr_kcal_per_day", "kcal/d"),
        ("activity_net_kcal_per_day", "kcal/d"),
        ("tdee_kcal_per_day", "kcal/d"),
        ("logged_intake_kcal_per_day", "kcal/d"),
        ("logged_days", "d"),
        ("implied_intake_kcal_per_day", "kcal/d"),
        ("intake_gap_kcal_per_day", "kcal/d"),
        ("energy_balance_kcal_per_day", "kcal/d"),
        ("forecast_weight_at_end_kg", "kg"),
        ("steady_state_weight_kg", "kg"),
        ("body_fat_percent_baseline", "%"),
    ] {
        out.push_scalar(name, None, unit, "not available: no weigh-ins");
    }
    out.push_text("rmr_equation", s.equation.code(), s.equation.label());
    out.push_text(
        "body_fat_source",
        "none",
        "No weigh-ins, so no body-fat estimate",
    );
    out.series.push(Series {
        name: "forecast_weight".into(),
        unit: "kg".into(),
        step: "daily".into(),
        label: "Forecast weight".into(),
        points: vec![],
    });
    for t in [weekly_columns(), options_columns(), plateau_columns()] {
        out.tables.push(t);
    }
}

fn weekly_columns() -> Table {
    Table {
        name: "weekly_energy".into(),
        label: "Energy by week".into(),
        columns: vec![
            Column::new("week_start", "", "Week starting"),
            Column::new("expenditure_kcal_per_day", "kcal/d", "Expenditure"),
            Column::new("logged_intake_kcal_per_day", "kcal/d", "Logged intake"),
            Column::new(
                "implied_intake_kcal_per_day",
                "kcal/d",
                "Intake implied by the weight trend",
            ),
        ],
        rows: vec![],
    }
}

/// One row per week from enrolment to the end of the period (weeks start on the enrolment
/// weekday; the last week may be short).
fn weekly_table(p: &Person<'_>, s: &Settings, enrolled: NaiveDate, to: NaiveDate) -> Table {
    let mut t = weekly_columns();
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
        let expenditure = bw.map(|w| p.rmr_at(w, ws) * s.base_pal + p.activity_kcal(ws, we, w));
        let (logged, _) = p.logged(ws, we);
        let implied = match (bw, mean_band(&p.trend.slope, ws, we)) {
            (Some(w), Some(sl)) => {
                Some(p.implied_intake(w, sl.value, p.activity_met_hours(ws, we)))
            }
            _ => None,
        };
        t.rows.push(vec![
            text(week_start.to_string()),
            num(expenditure),
            num(logged),
            num(implied),
        ]);
        week_start = day_after(week_start, 7);
    }
    t
}

fn options_columns() -> Table {
    Table {
        name: "options".into(),
        label: "What it would take to reach the target rate".into(),
        columns: vec![
            Column::new("kind", "", "Option"),
            Column::new("change_per_day", "", "Change per day"),
            Column::new("unit", "", "Unit"),
            Column::new(
                "resulting_intake_kcal_per_day",
                "kcal/d",
                "Resulting intake",
            ),
            Column::new("feasible", "", "Within safe limits"),
            Column::new("reason", "", "Why"),
        ],
        rows: vec![],
    }
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
fn options_table(
    p: &Person<'_>,
    s: &Settings,
    bw: f64,
    slope: Option<Band>,
    implied: Option<Band>,
) -> Table {
    let mut t = options_columns();
    let (Some(sl), Some(imp)) = (slope, implied) else {
        for (kind, unit) in [("intake", "kcal/d"), ("walking", "min/d")] {
            t.rows.push(vec![
                text(kind),
                Cell::Empty,
                text(unit),
                Cell::Empty,
                text("no"),
                text("Not enough recent weigh-ins to estimate the current energy balance."),
            ]);
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
    let floor = p.floor(s);
    let (feasible, reason) = if too_fast {
        ("no", fast_reason.clone())
    } else if new_intake < floor {
        (
            "no",
            format!(
                "It would bring intake to about {new_intake:.0} kcal a day, below {floor:.0} kcal \
                 a day; intakes that low need a clinician's supervision."
            ),
        )
    } else if already {
        ("yes", already_reason.to_string())
    } else {
        (
            "yes",
            format!(
                "Eating about {:.0} kcal/d less than now would start a loss of {:.2} kg/week at \
                 the current weight; the rate then slows as weight falls.",
                -d_ei, s.target_loss
            ),
        )
    };
    t.rows.push(vec![
        text("intake"),
        num(Some(d_ei)),
        text("kcal/d"),
        num(Some(new_intake)),
        text(feasible),
        text(reason),
    ]);

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
        ("no", fast_reason)
    } else if minutes > MAX_WALK_MIN {
        (
            "no",
            format!(
                "It would take about {minutes:.0} minutes of walking a day, more than \
                 {MAX_WALK_MIN:.0}; combine a shorter walk with a smaller change in intake."
            ),
        )
    } else if already {
        ("yes", already_reason.to_string())
    } else {
        (
            "yes",
            format!(
                "About {minutes:.0} extra minutes a day of walking at {:.1} MET (about 3 mph, \
                 Compendium 2011 code 17190) adds {net_needed:.0} kcal/d net of resting.",
                s.walking_met
            ),
        )
    };
    t.rows.push(vec![
        text("walking"),
        num(Some(minutes)),
        text("min/d"),
        num(Some(imp.value)),
        text(feasible),
        text(reason),
    ]);

    // When eating less alone would go below the floor, the practical answer is both: eat less
    // down to the floor and walk off the rest (same model terms as the two rows above).
    if !too_fast && !already && new_intake < floor && kcal_per_min > 0.0 {
        let cut = (imp.value - floor).max(0.0);
        let rest_kcal = (-d_ei - cut).max(0.0);
        let rest_minutes = (1.0 - BETA) * rest_kcal / kcal_per_min;
        let (feasible, reason) = if rest_minutes > MAX_WALK_MIN {
            (
                "no",
                format!(
                    "Even with intake at {floor:.0} kcal a day it would take about \
                     {rest_minutes:.0} minutes of walking a day; a slower target rate is more \
                     realistic."
                ),
            )
        } else {
            (
                "yes",
                format!(
                    "Eating about {cut:.0} kcal a day less (down to {floor:.0}) and walking about \
                     {rest_minutes:.0} minutes more a day together restore a loss of {:.2} \
                     kg/week.",
                    s.target_loss
                ),
            )
        };
        t.rows.push(vec![
            text("combined"),
            num(Some(rest_minutes)),
            text("min/d"),
            num(Some(floor.min(imp.value))),
            text(feasible),
            text(reason),
        ]);
    }
    t
}

fn plateau_columns() -> Table {
    Table {
        name: "plateau_assessment".into(),
        label: "Plateau assessment".into(),
        columns: vec![
            Column::new("start", "", "From"),
            Column::new("end", "", "To"),
            Column::new("observed_slope_kg_per_week", "kg/wk", "Observed trend"),
            Column::new("expected_slope_kg_per_week", "kg/wk", "Model expects"),
            Column::new(
                "implied_intake_before_kcal_per_day",
                "kcal/d",
                "Implied intake before",
            ),
            Column::new(
                "implied_intake_during_kcal_per_day",
                "kcal/d",
                "Implied intake during",
            ),
            Column::new("classification", "", "Reading"),
            Column::new("evidence", "", "Evidence"),
        ],
        rows: vec![],
    }
}

/// The `plateau_assessment` table: one row per `plateau` period of the trend output.
///
/// The expected slope is the linearised model's slope at the plateau's starting weight fed with
/// the habits: logged intake during the plateau when at least 4 days were logged, else the
/// implied intake of the `window_days` before the plateau. The plateau band is the trend's
/// slope interval widened to at least ±0.25 % of body weight per week.
///
/// Limitation: when the trend dates a plateau's onset later than the habit change that caused
/// it, the "before" window already holds some of the new intake and the drift reads smaller.
fn plateau_table(p: &Person<'_>, s: &Settings, enrolled: NaiveDate) -> Table {
    let mut t = plateau_columns();
    for per in p.trend.periods.iter().filter(|x| x.kind == "plateau") {
        let during_slope = mean_band(&p.trend.slope, per.start, per.end)
            .map(|b| b.value)
            .or(per.slope_wk.map(|x| x / 7.0));
        let observed_wk = per.slope_wk.or(during_slope.map(|x| x * 7.0));
        let bw_start = per.weight_start.or_else(|| p.weight_on(per.start));
        let bw_during = mean_band(&p.trend.level, per.start, per.end)
            .map(|b| b.value)
            .or(bw_start);
        let met_during = p.activity_met_hours(per.start, per.end);
        let implied_during = match (bw_during, during_slope) {
            (Some(w), Some(sl)) => Some(p.implied_intake(w, sl, met_during)),
            _ => None,
        };
        let before_to = day_before(per.start, 1);
        let before_from = day_before(per.start, s.window_days).max(enrolled);
        let implied_before =
            if per.start > enrolled && p.trend.slope.range(before_from..=before_to).count() >= 7 {
                let sl = mean_band(&p.trend.slope, before_from, before_to);
                let w = mean_band(&p.trend.level, before_from, before_to).map(|b| b.value);
                match (w, sl) {
                    (Some(w), Some(sl)) => Some(p.implied_intake(
                        w,
                        sl.value,
                        p.activity_met_hours(before_from, before_to),
                    )),
                    _ => None,
                }
            } else {
                None
            };
        let (logged, n_logged) = p.logged(per.start, per.end);
        let (habit, habit_src) = match logged.filter(|_| n_logged >= MIN_LOGGED_DAYS) {
            Some(l) => (Some(l), "logged intake"),
            None => (implied_before, "the implied intake before the plateau"),
        };
        let expected_wk = match (habit, bw_start) {
            (Some(i), Some(w)) => Some(p.expected_slope(w, i, met_during) * 7.0),
            _ => None,
        };
        let band_half = bw_start.unwrap_or(p.model.bw0) * PLATEAU_BAND_FRACTION_PER_WEEK;
        let band_lo = per.lower_wk.map_or(-band_half, |x| x.min(-band_half));
        let band_hi = per.upper_wk.map_or(band_half, |x| x.max(band_half));
        let drift = match (implied_before, implied_during) {
            (Some(b), Some(d)) => Some(d - b),
            _ => None,
        };
        let in_band = expected_wk.is_some_and(|e| e >= band_lo && e <= band_hi);
        let classification = match drift {
            Some(d) if d > s.drift_threshold => "intake_drift",
            Some(_) if in_band => "expected_slowdown",
            _ => "undetermined",
        };
        let f0 = |x: Option<f64>| x.map_or("n/a".to_string(), |v| format!("{v:.0}"));
        let f2 = |x: Option<f64>| x.map_or("n/a".to_string(), |v| format!("{v:+.2}"));
        let evidence = format!(
            "Implied intake {} kcal/d before and {} during (change {}, threshold {:.0}); with \
             {habit_src} the model expects {} kg/week at {} kg (plateau band {:+.2} to {:+.2}); \
             observed {} kg/week.",
            f0(implied_before),
            f0(implied_during),
            drift.map_or("n/a".to_string(), |d| format!("{d:+.0}")),
            s.drift_threshold,
            f2(expected_wk),
            bw_start.map_or("n/a".to_string(), |w| format!("{w:.1}")),
            band_lo,
            band_hi,
            f2(observed_wk),
        );
        t.rows.push(vec![
            text(per.start.to_string()),
            text(per.end.to_string()),
            num(observed_wk),
            num(expected_wk),
            num(implied_before),
            num(implied_during),
            text(classification),
            text(evidence),
        ]);
    }
    t
}

#[cfg(test)]
mod tests;

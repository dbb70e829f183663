//! The typed view of the `energy` module's output: what reports read, under the names the
//! module declares in its spec.

use crate::{EnergyModule, RestingEquation};
use chrono::NaiveDate;
use cohortpress_metric_api::view::{
    Code, Interval, ModuleView, OutputReader, OutputWriter, RowReader, TableRow, TypedFlag,
    ViewError, cell,
};
use cohortpress_metric_api::{Cell, MetricModule, ModuleSpec, Series, code_enum};

/// Output names of the `energy` module.
pub mod names {
    /// Resting energy at the current weight (scalar, kcal/d).
    pub const RMR_KCAL_PER_DAY: &str = "rmr_kcal_per_day";
    /// Logged activity net of resting (scalar, kcal/d).
    pub const ACTIVITY_NET_KCAL_PER_DAY: &str = "activity_net_kcal_per_day";
    /// Total energy expenditure (scalar, kcal/d, with interval).
    pub const TDEE_KCAL_PER_DAY: &str = "tdee_kcal_per_day";
    /// Baseline activity level TEE/RMR (scalar).
    pub const PAL_ESTIMATE: &str = "pal_estimate";
    /// Mean logged intake over logged days (scalar, kcal/d).
    pub const LOGGED_INTAKE_KCAL_PER_DAY: &str = "logged_intake_kcal_per_day";
    /// Days with an intake log (scalar, d).
    pub const LOGGED_DAYS: &str = "logged_days";
    /// Intake implied by the weight trend (scalar, kcal/d, with interval).
    pub const IMPLIED_INTAKE_KCAL_PER_DAY: &str = "implied_intake_kcal_per_day";
    /// Lower 95 % bound of the implied intake (scalar, kcal/d).
    pub const IMPLIED_INTAKE_LOWER_KCAL_PER_DAY: &str = "implied_intake_lower_kcal_per_day";
    /// Upper 95 % bound of the implied intake (scalar, kcal/d).
    pub const IMPLIED_INTAKE_UPPER_KCAL_PER_DAY: &str = "implied_intake_upper_kcal_per_day";
    /// The person's own under-reporting share since enrolment (scalar, %, with interval).
    pub const UNDERREPORTING_PERCENT: &str = "underreporting_percent";
    /// Implied minus logged intake (scalar, kcal/d, with interval).
    pub const INTAKE_GAP_KCAL_PER_DAY: &str = "intake_gap_kcal_per_day";
    /// Implied intake minus expenditure (scalar, kcal/d, with interval).
    pub const ENERGY_BALANCE_KCAL_PER_DAY: &str = "energy_balance_kcal_per_day";
    /// Model weight at the end of the forecast horizon: program end, or `forecast_min_days` past
    /// the period if later (scalar, kg, with interval).
    pub const FORECAST_WEIGHT_AT_END_KG: &str = "forecast_weight_at_end_kg";
    /// Weight at which the model comes to rest (scalar, kg, with interval).
    pub const STEADY_STATE_WEIGHT_KG: &str = "steady_state_weight_kg";
    /// Baseline body fat seeding the model (scalar, %).
    pub const BODY_FAT_PERCENT_BASELINE: &str = "body_fat_percent_baseline";
    /// [`crate::RestingEquation`] used (text).
    pub const RMR_EQUATION: &str = "rmr_equation";
    /// [`super::BodyFatSource`] (text).
    pub const BODY_FAT_SOURCE: &str = "body_fat_source";
    /// Daily model forecast to program end (series, kg).
    pub const FORECAST_WEIGHT: &str = "forecast_weight";
    /// Energy by week (table of [`super::WeekEnergyRow`]).
    pub const WEEKLY_ENERGY: &str = "weekly_energy";
    /// What it would take to reach the target rate (table of [`super::OptionRow`]).
    pub const OPTIONS: &str = "options";
    /// One row per plateau (table of [`super::PlateauRow`]).
    pub const PLATEAU_ASSESSMENT: &str = "plateau_assessment";
}

impl Code for RestingEquation {
    fn all() -> &'static [Self] {
        &RestingEquation::ALL
    }
    fn code(self) -> &'static str {
        RestingEquation::code(self)
    }
    fn label(self) -> &'static str {
        RestingEquation::label(self)
    }
}

code_enum! {
    /// Where the baseline body fat comes from.
    pub enum BodyFatSource {
        /// Measured, from the profile.
        Measured = "measured" => "Measured (from the profile)",
        /// Estimated with Jackson et al. 2002.
        Jackson2002 = "jackson_2002" => "Estimated from BMI, age and sex (Jackson et al. 2002)",
        /// No weigh-ins, so no estimate.
        None = "none" => "No weigh-ins, so no body-fat estimate",
    }
}

code_enum! {
    /// Kind of a row of the `options` table.
    pub enum OptionKind {
        /// Eat less.
        Intake = "intake" => "Change in intake",
        /// Walk more.
        Walking = "walking" => "Extra walking",
        /// Some of each: a cut in intake ([`combined_intake_cut`]) and walking for the rest.
        Combined = "combined" => "Intake and walking together",
    }
}

/// The intake cut of "some of each" (the `combined` row of the `options` table), kcal/d: half
/// the change `need` that eating less alone would take, but never past the `floor` at the
/// careful end of the intake (`careful_intake`: the implied intake's lower bound, or the mean
/// logged intake when that is lower), and never below zero; the rest comes from walking. The
/// module writes its `combined` row with it and the report sizes its "Some of each" with it
/// (rounded to its step within both limits), so the two are one option.
pub fn combined_intake_cut(need: f64, careful_intake: f64, floor: f64) -> f64 {
    (need / 2.0).min(careful_intake - floor).max(0.0)
}

/// The careful end of a person's intake before any change: the lower bound of the implied
/// intake, or the mean logged intake when that is lower (a participant measures "less than
/// now" against their own food log).
pub fn careful_intake(implied_lower: f64, logged: Option<f64>) -> f64 {
    logged
        .filter(|l| l.is_finite())
        .map_or(implied_lower, |l| l.min(implied_lower))
}

code_enum! {
    /// What a plateau most likely is.
    pub enum PlateauCause {
        /// The slowdown expected at the new, lower weight.
        ExpectedSlowdown = "expected_slowdown" => "Expected slowdown",
        /// A gradual rise in intake.
        IntakeDrift = "intake_drift" => "Intake drift",
        /// Not clear from the records.
        Undetermined = "undetermined" => "Undetermined",
    }
}

code_enum! {
    /// Flags of the `energy` module.
    pub enum EnergyFlag {
        /// Too few data for part of the computation.
        InsufficientData = "insufficient_data" => "Too few data for part of the computation",
        /// Lean-mass equation without body fat.
        EquationFallback = "equation_fallback" => "Lean-mass equation without body fat",
        /// Logged intake far from implied.
        LogsInconsistentWithTrend = "logs_inconsistent_with_trend" => "Logged intake far from implied",
        /// Logged intake below the intake floor.
        LowLoggedIntake = "low_logged_intake" => "Logged intake below the intake floor",
        /// Weight rose faster than energy balance explains (beyond the most a person can take in).
        UnexplainedWeightChange = "unexplained_weight_change" => "Weight changed faster than energy balance explains",
        /// The weight trend implies an intake below a very-low-calorie diet's, or a fall faster
        /// than eating nothing explains (for a clinician).
        VeryLowImpliedIntake = "very_low_implied_intake" => "Weight trend implies a very low intake, or an unexplained fast loss",
        /// At the intake the weight trend implies, the model takes weight below BMI 18.5 (WHO
        /// underweight) within the forecast horizon, or comes to rest there, or, for someone
        /// underweight now, 1 kg or more further (for a clinician, except a resting weight
        /// between BMI 16 and 18.5 beyond the horizon, a notice).
        ForecastUnderweight = "forecast_underweight" => "At the current intake, weight heads below a BMI of 18.5, or further below it",
        /// Left the program before the period began: the period's energy figures are not estimated.
        LeftBeforePeriod = "left_before_period" => "Left before the period: its energy figures not estimated",
        /// The energy-balance estimates are not made for this person (a pregnancy, or
        /// breastfeeding).
        NotModelled = "not_modelled" => "Energy-balance estimates not made (pregnancy or breastfeeding)",
    }
}

/// One row of the `weekly_energy` table.
#[derive(Debug, Clone, PartialEq)]
pub struct WeekEnergyRow {
    /// First day (Monday) of the week.
    pub week_start: NaiveDate,
    /// Expenditure, kcal/d.
    pub expenditure_kcal_per_day: Option<f64>,
    /// Logged intake, kcal/d.
    pub logged_intake_kcal_per_day: Option<f64>,
    /// Intake implied by the weight trend, kcal/d.
    pub implied_intake_kcal_per_day: Option<f64>,
}

impl TableRow for WeekEnergyRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("week_start", "", "Week starting"),
        ("expenditure_kcal_per_day", "kcal/d", "Expenditure"),
        ("logged_intake_kcal_per_day", "kcal/d", "Logged intake"),
        (
            "implied_intake_kcal_per_day",
            "kcal/d",
            "Intake implied by the weight trend",
        ),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(WeekEnergyRow {
            week_start: r.required("week_start", r.date("week_start")?)?,
            expenditure_kcal_per_day: r.number("expenditure_kcal_per_day")?,
            logged_intake_kcal_per_day: r.number("logged_intake_kcal_per_day")?,
            implied_intake_kcal_per_day: r.number("implied_intake_kcal_per_day")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::date(Some(self.week_start)),
            cell::number(self.expenditure_kcal_per_day),
            cell::number(self.logged_intake_kcal_per_day),
            cell::number(self.implied_intake_kcal_per_day),
        ]
    }
}

/// One row of the `options` table.
#[derive(Debug, Clone, PartialEq)]
pub struct OptionRow {
    /// Kind of change.
    pub kind: OptionKind,
    /// Change per day, in `unit` (intake: kcal/d, negative = eat less; walking: min/d).
    pub change_per_day: Option<f64>,
    /// Unit of `change_per_day`.
    pub unit: String,
    /// Intake after the change, kcal/d.
    pub resulting_intake_kcal_per_day: Option<f64>,
    /// Within safe limits?
    pub feasible: bool,
    /// Why (or why not).
    pub reason: String,
}

impl TableRow for OptionRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("kind", "", "Option"),
        ("change_per_day", "", "Change per day"),
        ("unit", "", "Unit"),
        (
            "resulting_intake_kcal_per_day",
            "kcal/d",
            "Resulting intake",
        ),
        ("feasible", "", "Within safe limits"),
        ("reason", "", "Why"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(OptionRow {
            kind: r.required("kind", r.code("kind")?)?,
            change_per_day: r.number("change_per_day")?,
            unit: r.text("unit")?.unwrap_or_default().to_string(),
            resulting_intake_kcal_per_day: r.number("resulting_intake_kcal_per_day")?,
            feasible: r.required("feasible", r.yes_no("feasible")?)?,
            reason: r.text("reason")?.unwrap_or_default().to_string(),
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::code(Some(self.kind)),
            cell::number(self.change_per_day),
            cell::text(Some(&self.unit)),
            cell::number(self.resulting_intake_kcal_per_day),
            cell::yes_no(Some(self.feasible)),
            cell::text(Some(&self.reason)),
        ]
    }
}

/// One row of the `plateau_assessment` table.
#[derive(Debug, Clone, PartialEq)]
pub struct PlateauRow {
    /// First day of the plateau.
    pub start: NaiveDate,
    /// Last day of the plateau.
    pub end: NaiveDate,
    /// Observed trend slope, kg/wk.
    pub observed_slope_kg_per_week: Option<f64>,
    /// Slope the model expects at the plateau's starting weight with the intake implied early
    /// in the program (`implied_intake_before_kcal_per_day`), kg/wk.
    pub expected_slope_kg_per_week: Option<f64>,
    /// Implied intake early in the program (days 7–34, or from enrolment to the plateau's
    /// start when it begins earlier), kcal/d.
    pub implied_intake_before_kcal_per_day: Option<f64>,
    /// Implied intake during the plateau, kcal/d.
    pub implied_intake_during_kcal_per_day: Option<f64>,
    /// Reading.
    pub classification: PlateauCause,
    /// The module's evidence text (kg and model terms).
    pub evidence: String,
    /// Change in implied intake, early to plateau, kcal/d.
    pub intake_change_kcal_per_day: Option<f64>,
    /// Lower 95 % bound of the change.
    pub intake_change_lower_kcal_per_day: Option<f64>,
    /// Upper 95 % bound of the change.
    pub intake_change_upper_kcal_per_day: Option<f64>,
}

impl TableRow for PlateauRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("start", "", "From"),
        ("end", "", "To"),
        ("observed_slope_kg_per_week", "kg/wk", "Observed trend"),
        ("expected_slope_kg_per_week", "kg/wk", "Model expects"),
        (
            "implied_intake_before_kcal_per_day",
            "kcal/d",
            "Implied intake before",
        ),
        (
            "implied_intake_during_kcal_per_day",
            "kcal/d",
            "Implied intake during",
        ),
        ("classification", "", "Reading"),
        ("evidence", "", "Evidence"),
        (
            "intake_change_kcal_per_day",
            "kcal/d",
            "Change in implied intake, early to plateau",
        ),
        (
            "intake_change_lower_kcal_per_day",
            "kcal/d",
            "Change, lower 95 %",
        ),
        (
            "intake_change_upper_kcal_per_day",
            "kcal/d",
            "Change, upper 95 %",
        ),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(PlateauRow {
            start: r.required("start", r.date("start")?)?,
            end: r.required("end", r.date("end")?)?,
            observed_slope_kg_per_week: r.number("observed_slope_kg_per_week")?,
            expected_slope_kg_per_week: r.number("expected_slope_kg_per_week")?,
            implied_intake_before_kcal_per_day: r.number("implied_intake_before_kcal_per_day")?,
            implied_intake_during_kcal_per_day: r.number("implied_intake_during_kcal_per_day")?,
            classification: r.required("classification", r.code("classification")?)?,
            evidence: r.text("evidence")?.unwrap_or_default().to_string(),
            intake_change_kcal_per_day: r.number("intake_change_kcal_per_day")?,
            intake_change_lower_kcal_per_day: r.number("intake_change_lower_kcal_per_day")?,
            intake_change_upper_kcal_per_day: r.number("intake_change_upper_kcal_per_day")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::date(Some(self.start)),
            cell::date(Some(self.end)),
            cell::number(self.observed_slope_kg_per_week),
            cell::number(self.expected_slope_kg_per_week),
            cell::number(self.implied_intake_before_kcal_per_day),
            cell::number(self.implied_intake_during_kcal_per_day),
            cell::code(Some(self.classification)),
            cell::text(Some(&self.evidence)),
            cell::number(self.intake_change_kcal_per_day),
            cell::number(self.intake_change_lower_kcal_per_day),
            cell::number(self.intake_change_upper_kcal_per_day),
        ]
    }
}

/// Everything the `energy` module outputs, typed.
///
/// Outputs the module leaves out when there are no weigh-ins read as missing.
#[derive(Debug, Clone, PartialEq)]
pub struct EnergyView {
    /// Resting energy at the current weight, kcal/d.
    pub rmr_kcal_per_day: Interval,
    /// Logged activity net of resting, kcal/d.
    pub activity_net_kcal_per_day: Interval,
    /// Total energy expenditure, kcal/d.
    pub tdee_kcal_per_day: Interval,
    /// Baseline activity level (TEE/RMR).
    pub pal_estimate: Option<f64>,
    /// Mean logged intake, kcal/d.
    pub logged_intake_kcal_per_day: Interval,
    /// Days with an intake log.
    pub logged_days: Option<f64>,
    /// Intake implied by the weight trend, kcal/d, with its 95 % interval.
    pub implied_intake_kcal_per_day: Interval,
    /// Lower 95 % bound of the implied intake, kcal/d.
    pub implied_intake_lower_kcal_per_day: Option<f64>,
    /// Upper 95 % bound of the implied intake, kcal/d.
    pub implied_intake_upper_kcal_per_day: Option<f64>,
    /// The person's own under-reporting share since enrolment (not this period's gap), %.
    pub underreporting_percent: Interval,
    /// Implied minus logged intake, kcal/d.
    pub intake_gap_kcal_per_day: Interval,
    /// Implied intake minus expenditure, kcal/d.
    pub energy_balance_kcal_per_day: Interval,
    /// Model weight at the end of the forecast horizon (program end, or `forecast_min_days` past
    /// the period if later), kg.
    pub forecast_weight_at_end_kg: Interval,
    /// Weight at which the model comes to rest, kg.
    pub steady_state_weight_kg: Interval,
    /// Baseline body fat, %.
    pub body_fat_percent_baseline: Interval,
    /// Resting-energy equation used.
    pub rmr_equation: RestingEquation,
    /// Where the baseline body fat comes from.
    pub body_fat_source: BodyFatSource,
    /// Daily model forecast, kg, with its band.
    pub forecast_weight: Series,
    /// Energy by week.
    pub weekly_energy: Vec<WeekEnergyRow>,
    /// What it would take to reach the target rate.
    pub options: Vec<OptionRow>,
    /// One row per plateau of the trend.
    pub plateau_assessment: Vec<PlateauRow>,
    /// Flags.
    pub flags: Vec<TypedFlag<EnergyFlag>>,
}

/// Label of the `weekly_energy` table.
pub const WEEKLY_ENERGY_LABEL: &str = "Energy by week";
/// Label of the `options` table.
pub const OPTIONS_LABEL: &str = "What it would take to reach the target rate";
/// Label of the `plateau_assessment` table.
pub const PLATEAU_ASSESSMENT_LABEL: &str = "Plateau assessment";

impl ModuleView for EnergyView {
    const MODULE: &'static str = "energy";

    fn spec() -> ModuleSpec {
        EnergyModule.spec()
    }

    fn read(r: &OutputReader<'_>) -> Result<Self, ViewError> {
        use names::*;
        let opt_interval = |n: &str| -> Result<Interval, ViewError> {
            Ok(r.optional(n, || r.interval(n))?.unwrap_or_default())
        };
        let opt_scalar = |n: &str| -> Result<Option<f64>, ViewError> {
            Ok(r.optional(n, || r.scalar(n))?.flatten())
        };
        Ok(EnergyView {
            rmr_kcal_per_day: r.interval(RMR_KCAL_PER_DAY)?,
            activity_net_kcal_per_day: r.interval(ACTIVITY_NET_KCAL_PER_DAY)?,
            tdee_kcal_per_day: r.interval(TDEE_KCAL_PER_DAY)?,
            pal_estimate: opt_scalar(PAL_ESTIMATE)?,
            logged_intake_kcal_per_day: r.interval(LOGGED_INTAKE_KCAL_PER_DAY)?,
            logged_days: r.scalar(LOGGED_DAYS)?,
            implied_intake_kcal_per_day: r.interval(IMPLIED_INTAKE_KCAL_PER_DAY)?,
            implied_intake_lower_kcal_per_day: opt_scalar(IMPLIED_INTAKE_LOWER_KCAL_PER_DAY)?,
            implied_intake_upper_kcal_per_day: opt_scalar(IMPLIED_INTAKE_UPPER_KCAL_PER_DAY)?,
            underreporting_percent: opt_interval(UNDERREPORTING_PERCENT)?,
            intake_gap_kcal_per_day: r.interval(INTAKE_GAP_KCAL_PER_DAY)?,
            energy_balance_kcal_per_day: r.interval(ENERGY_BALANCE_KCAL_PER_DAY)?,
            forecast_weight_at_end_kg: r.interval(FORECAST_WEIGHT_AT_END_KG)?,
            steady_state_weight_kg: r.interval(STEADY_STATE_WEIGHT_KG)?,
            body_fat_percent_baseline: r.interval(BODY_FAT_PERCENT_BASELINE)?,
            rmr_equation: r.code(RMR_EQUATION)?,
            body_fat_source: r.code(BODY_FAT_SOURCE)?,
            forecast_weight: r.series(FORECAST_WEIGHT)?,
            weekly_energy: r.table(WEEKLY_ENERGY)?,
            options: r.table(OPTIONS)?,
            plateau_assessment: r.table(PLATEAU_ASSESSMENT)?,
            flags: r.flags()?,
        })
    }

    fn write(&self, w: &mut OutputWriter) {
        use names::*;
        w.interval(RMR_KCAL_PER_DAY, self.rmr_kcal_per_day);
        w.interval(ACTIVITY_NET_KCAL_PER_DAY, self.activity_net_kcal_per_day);
        w.interval(TDEE_KCAL_PER_DAY, self.tdee_kcal_per_day);
        w.scalar(PAL_ESTIMATE, self.pal_estimate);
        w.interval(LOGGED_INTAKE_KCAL_PER_DAY, self.logged_intake_kcal_per_day);
        w.scalar(LOGGED_DAYS, self.logged_days);
        w.interval(
            IMPLIED_INTAKE_KCAL_PER_DAY,
            self.implied_intake_kcal_per_day,
        );
        w.scalar(
            IMPLIED_INTAKE_LOWER_KCAL_PER_DAY,
            self.implied_intake_lower_kcal_per_day,
        );
        w.scalar(
            IMPLIED_INTAKE_UPPER_KCAL_PER_DAY,
            self.implied_intake_upper_kcal_per_day,
        );
        w.interval(UNDERREPORTING_PERCENT, self.underreporting_percent);
        w.interval(INTAKE_GAP_KCAL_PER_DAY, self.intake_gap_kcal_per_day);
        w.interval(
            ENERGY_BALANCE_KCAL_PER_DAY,
            self.energy_balance_kcal_per_day,
        );
        w.interval(FORECAST_WEIGHT_AT_END_KG, self.forecast_weight_at_end_kg);
        w.interval(STEADY_STATE_WEIGHT_KG, self.steady_state_weight_kg);
        w.interval(BODY_FAT_PERCENT_BASELINE, self.body_fat_percent_baseline);
        w.code(RMR_EQUATION, self.rmr_equation);
        w.code(BODY_FAT_SOURCE, self.body_fat_source);
        w.series(&self.forecast_weight);
        w.table(WEEKLY_ENERGY, WEEKLY_ENERGY_LABEL, &self.weekly_energy);
        w.table(OPTIONS, OPTIONS_LABEL, &self.options);
        w.table(
            PLATEAU_ASSESSMENT,
            PLATEAU_ASSESSMENT_LABEL,
            &self.plateau_assessment,
        );
        w.flags(&self.flags);
    }
}

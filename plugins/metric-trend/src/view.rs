//! The typed view of the `trend` module's output: what the module writes and what reports and
//! other modules read, under one set of names.

use crate::TrendModule;
use chrono::NaiveDate;
use cohortpress_metric_api::view::{
    Interval, ModuleView, OutputReader, OutputWriter, RowReader, TableRow, TypedFlag, ViewError,
    cell,
};
use cohortpress_metric_api::{Cell, MetricModule, ModuleSpec, Series, code_enum};

/// Output names of the `trend` module.
pub mod names {
    /// Smoothed weight per day with its 95 % band (series, kg).
    pub const WEIGHT_TREND: &str = "weight_trend";
    /// Smoothed rate of change per day with its 95 % band (series, kg/d).
    pub const WEIGHT_SLOPE: &str = "weight_slope";
    /// Weigh-ins used for the trend (series, kg).
    pub const WEIGH_INS: &str = "weigh_ins";
    /// Mean rate of change over the 28 days ending each day (series, kg/d).
    pub const WEIGHT_SLOPE_28D: &str = "weight_slope_28d";
    /// Trend weight on each calendar week's last day in the trend's span, with its 95 % band
    /// (series, kg, weekly), for the tidy weekly file.
    pub const WEIGHT_TREND_WEEKLY: &str = "weight_trend_weekly";
    /// Probability that the current plateau's mean slope lies in the band (scalar).
    pub const PLATEAU_CONFIDENCE: &str = "plateau_confidence";
    /// Day the trend entered the plateau band (text, a date or empty).
    pub const PLATEAU_ONSET: &str = "plateau_onset";
    /// Trend weight now minus its lowest point so far (scalar, kg, with interval).
    pub const REGAIN_KG: &str = "regain_kg";
    /// Probability that the trend has risen more than 1 % of baseline (scalar).
    pub const REGAIN_CONFIDENCE: &str = "regain_confidence";
    /// [`super::RegainVerdict`] (text).
    pub const REGAIN_VERDICT: &str = "regain_verdict";
    /// Plateau, regain, loss and insufficient-data periods (table of [`super::PeriodRow`]).
    pub const PERIODS: &str = "periods";
    /// Offsets of non-home weigh-in sources from the home scale (table of
    /// [`super::SourceOffsetRow`]).
    pub const SOURCE_OFFSETS: &str = "source_offsets";
    /// Steps found in the weigh-ins and left out of the trend (table of
    /// [`super::WeighInStepRow`]).
    pub const WEIGH_IN_STEPS: &str = "weigh_in_steps";
    /// Trend weight on the last day with a weigh-in (scalar, kg, with interval).
    pub const CURRENT_WEIGHT_KG: &str = "current_weight_kg";
    /// Mean trend slope over the last window (scalar, kg/wk, with interval).
    pub const SLOPE_KG_PER_WEEK: &str = "slope_kg_per_week";
    /// Theil–Sen slope over the last window (scalar, kg/wk, with interval).
    pub const THEIL_SEN_SLOPE_KG_PER_WEEK: &str = "theil_sen_slope_kg_per_week";
    /// Day-to-day scatter of weigh-ins around the trend (scalar, kg).
    pub const NOISE_SD_KG: &str = "noise_sd_kg";
    /// Weigh-ins used (scalar).
    pub const WEIGH_INS_USED: &str = "weigh_ins_used";
    /// Weigh-ins ignored as outliers (scalar).
    pub const OUTLIERS_IGNORED: &str = "outliers_ignored";
    /// Days from the last weigh-in to the period end (scalar, d).
    pub const DAYS_SINCE_LAST_WEIGH_IN: &str = "days_since_last_weigh_in";
    /// [`super::Status`] (text).
    pub const STATUS: &str = "status";
}

code_enum! {
    /// Where the weight trend stands over the last window.
    pub enum Status {
        /// A clear loss.
        Losing = "losing" => "Losing weight",
        /// Levelled off after a loss.
        Plateau = "plateau" => "Weight has levelled off after a loss",
        /// A clear rise.
        Regaining = "regaining" => "Weight is going up",
        /// Steady, without a prior loss.
        Stable = "stable" => "Weight is steady",
        /// No verdict: a pace inside the band not shown to lie in it, or beyond it with an
        /// interval that reaches past zero.
        Unclear = "unclear" => "No clear verdict: the weigh-ins do not yet show whether weight has levelled off or is still changing",
        /// Too few weigh-ins.
        InsufficientData = "insufficient_data" => "Not enough weigh-ins to tell",
    }
}

code_enum! {
    /// Whether the trend has come back up from its lowest point.
    pub enum RegainVerdict {
        /// It has.
        Regaining = "regaining" => "Weight has come back up from its lowest point",
        /// No clear regain.
        NotRegaining = "not_regaining" => "No clear regain from the lowest point",
        /// No loss to regain from yet.
        NoPriorLoss = "no_prior_loss" => "No loss of at least the set share of baseline yet",
        /// Too few recent weigh-ins.
        InsufficientData = "insufficient_data" => "Not enough recent weigh-ins to tell",
    }
}

code_enum! {
    /// Kind of a row of the `periods` table.
    pub enum PeriodKind {
        /// A loss.
        Loss = "loss" => "Loss",
        /// A plateau after a loss.
        Plateau = "plateau" => "Plateau",
        /// A rise after a loss.
        Regain = "regain" => "Regain",
        /// Too few weigh-ins to judge.
        InsufficientData = "insufficient_data" => "Too few weigh-ins",
    }
}

code_enum! {
    /// Flags of the `trend` module.
    pub enum TrendFlag {
        /// Fewer than 3 days with a weigh-in.
        InsufficientData = "insufficient_data" => "Fewer than 3 days with a weigh-in",
        /// The weigh-ins jumped between two days by more than body weight changes.
        WeighInStep = "weigh_in_step" => "Weigh-ins jumped by more than body weight changes",
    }
}

/// One row of the `periods` table.
#[derive(Debug, Clone, PartialEq)]
pub struct PeriodRow {
    /// Kind.
    pub kind: PeriodKind,
    /// First day.
    pub start: NaiveDate,
    /// Last day.
    pub end: NaiveDate,
    /// Days, inclusive.
    pub days: Option<f64>,
    /// Mean slope, kg/wk, with its 95 % interval.
    pub slope_kg_per_week: Option<f64>,
    /// Lower bound of the slope, kg/wk.
    pub slope_lower_kg_per_week: Option<f64>,
    /// Upper bound of the slope, kg/wk.
    pub slope_upper_kg_per_week: Option<f64>,
    /// Trend weight on the first day, kg.
    pub weight_start_kg: Option<f64>,
    /// Trend weight on the last day, kg.
    pub weight_end_kg: Option<f64>,
    /// For plateaus: probability that the mean slope lies in the band.
    pub confidence: Option<f64>,
}

impl TableRow for PeriodRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("kind", "", "Kind"),
        ("start", "", "Start"),
        ("end", "", "End"),
        ("days", "d", "Days"),
        ("slope_kg_per_week", "kg/wk", "Slope"),
        ("slope_lower_kg_per_week", "kg/wk", "Slope, lower 95 %"),
        ("slope_upper_kg_per_week", "kg/wk", "Slope, upper 95 %"),
        ("weight_start_kg", "kg", "Weight at start"),
        ("weight_end_kg", "kg", "Weight at end"),
        ("confidence", "", "Confidence"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(PeriodRow {
            kind: r.required("kind", r.code("kind")?)?,
            start: r.required("start", r.date("start")?)?,
            end: r.required("end", r.date("end")?)?,
            days: r.number("days")?,
            slope_kg_per_week: r.number("slope_kg_per_week")?,
            slope_lower_kg_per_week: r.number("slope_lower_kg_per_week")?,
            slope_upper_kg_per_week: r.number("slope_upper_kg_per_week")?,
            weight_start_kg: r.number("weight_start_kg")?,
            weight_end_kg: r.number("weight_end_kg")?,
            confidence: r.number("confidence")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::code(Some(self.kind)),
            cell::date(Some(self.start)),
            cell::date(Some(self.end)),
            cell::number(self.days),
            cell::number(self.slope_kg_per_week),
            cell::number(self.slope_lower_kg_per_week),
            cell::number(self.slope_upper_kg_per_week),
            cell::number(self.weight_start_kg),
            cell::number(self.weight_end_kg),
            cell::number(self.confidence),
        ]
    }
}

/// Label of the `periods` table.
pub const PERIODS_LABEL: &str = "Trend periods";

/// One row of the `source_offsets` table.
#[derive(Debug, Clone, PartialEq)]
pub struct SourceOffsetRow {
    /// The weigh-in source as written.
    pub source: String,
    /// Its offset from the home-scale trend, kg (taken off its readings).
    pub offset_kg: Option<f64>,
    /// Weigh-ins of that source the offset rests on.
    pub weigh_ins: Option<f64>,
}

impl TableRow for SourceOffsetRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("source", "", "Source"),
        ("offset_kg", "kg", "Offset"),
        ("weigh_ins", "", "Weigh-ins"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(SourceOffsetRow {
            source: r.required("source", r.text("source")?)?.to_string(),
            offset_kg: r.number("offset_kg")?,
            weigh_ins: r.number("weigh_ins")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::text(Some(&self.source)),
            cell::number(self.offset_kg),
            cell::number(self.weigh_ins),
        ]
    }
}

/// Label of the `source_offsets` table.
pub const SOURCE_OFFSETS_LABEL: &str = "Weigh-in source offsets from the home scale";

/// One row of the `weigh_in_steps` table: a step in the weigh-ins the trend leaves out (the
/// weigh-ins before it are moved by `step_kg` onto the level after it).
#[derive(Debug, Clone, PartialEq)]
pub struct WeighInStepRow {
    /// Last weigh-in day before the step.
    pub before: NaiveDate,
    /// First weigh-in day after it.
    pub after: NaiveDate,
    /// Size of the step, kg (after minus before).
    pub step_kg: Option<f64>,
    /// Its standard error, kg.
    pub se_kg: Option<f64>,
}

impl TableRow for WeighInStepRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("before", "", "Last day before"),
        ("after", "", "First day after"),
        ("step_kg", "kg", "Step"),
        ("se_kg", "kg", "Standard error"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(WeighInStepRow {
            before: r.required("before", r.date("before")?)?,
            after: r.required("after", r.date("after")?)?,
            step_kg: r.number("step_kg")?,
            se_kg: r.number("se_kg")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::date(Some(self.before)),
            cell::date(Some(self.after)),
            cell::number(self.step_kg),
            cell::number(self.se_kg),
        ]
    }
}

/// Profile flag saying that the steps in this person's weigh-ins are real changes of body
/// weight (fluid built up or passed, surgery), as a clinician has found: the weight change
/// since the start then counts them (the `outcomes` module), while the trend and the energy
/// figures still leave them out, since a jump of fluid is not tissue.
pub const REAL_STEPS_FLAG: &str = "weigh-in-steps-real";

/// Label of the `weigh_in_steps` table.
pub const WEIGH_IN_STEPS_LABEL: &str = "Steps in the weigh-ins left out of the trend";

/// Total of the steps after `day`, kg: what a weigh-in on `day` is moved by in the trend (0
/// without steps).
pub fn step_shift_after(steps: &[WeighInStepRow], day: NaiveDate) -> f64 {
    steps
        .iter()
        .filter(|s| s.before >= day)
        .filter_map(|s| s.step_kg)
        .sum()
}

/// Everything the `trend` module outputs, typed.
///
/// Outputs the module leaves out when there are fewer than 3 days with a weigh-in read as
/// missing (`None`, an empty interval).
#[derive(Debug, Clone, PartialEq)]
pub struct TrendView {
    /// Smoothed weight per day with its 95 % band, kg.
    pub weight_trend: Series,
    /// Smoothed rate of change per day with its 95 % band, kg/d.
    pub weight_slope: Series,
    /// Weigh-ins used, kg.
    pub weigh_ins: Series,
    /// Mean rate of change over the 28 days ending each day, kg/d.
    pub weight_slope_28d: Option<Series>,
    /// Trend weight on each week's last day in the trend's span, kg (weekly).
    pub weight_trend_weekly: Option<Series>,
    /// Probability that the current plateau's mean slope lies in the band.
    pub plateau_confidence: Option<f64>,
    /// Day the trend entered the plateau band (current plateau).
    pub plateau_onset: Option<NaiveDate>,
    /// Trend weight now minus its lowest point so far, kg.
    pub regain_kg: Interval,
    /// Probability of a rise of more than 1 % of baseline from the lowest point.
    pub regain_confidence: Option<f64>,
    /// Regain verdict.
    pub regain_verdict: Option<RegainVerdict>,
    /// Periods.
    pub periods: Vec<PeriodRow>,
    /// Offsets of non-home weigh-in sources.
    pub source_offsets: Vec<SourceOffsetRow>,
    /// Steps in the weigh-ins the trend leaves out.
    pub weigh_in_steps: Vec<WeighInStepRow>,
    /// Trend weight on the last day with a weigh-in, kg.
    pub current_weight_kg: Interval,
    /// Mean trend slope over the last window, kg/wk.
    pub slope_kg_per_week: Interval,
    /// Theil–Sen slope over the last window, kg/wk.
    pub theil_sen_slope_kg_per_week: Interval,
    /// Scatter of weigh-ins around the trend, kg.
    pub noise_sd_kg: Option<f64>,
    /// Weigh-ins used.
    pub weigh_ins_used: Option<f64>,
    /// Weigh-ins ignored as outliers.
    pub outliers_ignored: Option<f64>,
    /// Days from the last weigh-in to the period end.
    pub days_since_last_weigh_in: Option<f64>,
    /// Status over the last window.
    pub status: Status,
    /// Flags.
    pub flags: Vec<TypedFlag<TrendFlag>>,
}

impl ModuleView for TrendView {
    const MODULE: &'static str = "trend";

    fn spec() -> ModuleSpec {
        TrendModule.spec()
    }

    fn read(r: &OutputReader<'_>) -> Result<Self, ViewError> {
        use names::*;
        Ok(TrendView {
            weight_trend: r.series(WEIGHT_TREND)?,
            weight_slope: r.series(WEIGHT_SLOPE)?,
            weigh_ins: r.series(WEIGH_INS)?,
            weight_slope_28d: r.optional(WEIGHT_SLOPE_28D, || r.series(WEIGHT_SLOPE_28D))?,
            weight_trend_weekly: r
                .optional(WEIGHT_TREND_WEEKLY, || r.series(WEIGHT_TREND_WEEKLY))?,
            plateau_confidence: r
                .optional(PLATEAU_CONFIDENCE, || r.scalar(PLATEAU_CONFIDENCE))?
                .flatten(),
            plateau_onset: r
                .optional(PLATEAU_ONSET, || r.date(PLATEAU_ONSET))?
                .flatten(),
            regain_kg: r
                .optional(REGAIN_KG, || r.interval(REGAIN_KG))?
                .unwrap_or_default(),
            regain_confidence: r
                .optional(REGAIN_CONFIDENCE, || r.scalar(REGAIN_CONFIDENCE))?
                .flatten(),
            regain_verdict: r.optional(REGAIN_VERDICT, || r.code(REGAIN_VERDICT))?,
            periods: r.table(PERIODS)?,
            source_offsets: r
                .optional(SOURCE_OFFSETS, || r.table(SOURCE_OFFSETS))?
                .unwrap_or_default(),
            weigh_in_steps: r
                .optional(WEIGH_IN_STEPS, || r.table(WEIGH_IN_STEPS))?
                .unwrap_or_default(),
            current_weight_kg: r.interval(CURRENT_WEIGHT_KG)?,
            slope_kg_per_week: r.interval(SLOPE_KG_PER_WEEK)?,
            theil_sen_slope_kg_per_week: r.interval(THEIL_SEN_SLOPE_KG_PER_WEEK)?,
            noise_sd_kg: r.scalar(NOISE_SD_KG)?,
            weigh_ins_used: r.scalar(WEIGH_INS_USED)?,
            outliers_ignored: r.scalar(OUTLIERS_IGNORED)?,
            days_since_last_weigh_in: r.scalar(DAYS_SINCE_LAST_WEIGH_IN)?,
            status: r.code(STATUS)?,
            flags: r.flags()?,
        })
    }

    fn write(&self, w: &mut OutputWriter) {
        use names::*;
        w.series(&self.weight_trend);
        w.series(&self.weight_slope);
        w.series(&self.weigh_ins);
        if let Some(s) = &self.weight_slope_28d {
            w.series(s);
        }
        if let Some(s) = &self.weight_trend_weekly {
            w.series(s);
        }
        w.scalar(PLATEAU_CONFIDENCE, self.plateau_confidence);
        w.date(PLATEAU_ONSET, self.plateau_onset);
        w.interval(REGAIN_KG, self.regain_kg);
        w.scalar(REGAIN_CONFIDENCE, self.regain_confidence);
        if let Some(v) = self.regain_verdict {
            w.code(REGAIN_VERDICT, v);
        }
        w.table(PERIODS, PERIODS_LABEL, &self.periods);
        w.table(SOURCE_OFFSETS, SOURCE_OFFSETS_LABEL, &self.source_offsets);
        w.table(WEIGH_IN_STEPS, WEIGH_IN_STEPS_LABEL, &self.weigh_in_steps);
        w.interval(CURRENT_WEIGHT_KG, self.current_weight_kg);
        w.interval(SLOPE_KG_PER_WEEK, self.slope_kg_per_week);
        w.interval(
            THEIL_SEN_SLOPE_KG_PER_WEEK,
            self.theil_sen_slope_kg_per_week,
        );
        w.scalar(NOISE_SD_KG, self.noise_sd_kg);
        w.scalar(WEIGH_INS_USED, self.weigh_ins_used);
        w.scalar(OUTLIERS_IGNORED, self.outliers_ignored);
        w.scalar(DAYS_SINCE_LAST_WEIGH_IN, self.days_since_last_weigh_in);
        w.code(STATUS, self.status);
        w.flags(&self.flags);
    }
}

fn empty_series(name: &str, unit: &str, step: &str, label: &str) -> Series {
    Series {
        name: name.into(),
        unit: unit.into(),
        step: step.into(),
        label: label.into(),
        points: vec![],
    }
}

impl Default for TrendView {
    /// A trend with no weigh-ins: empty series, every value missing, status
    /// [`Status::InsufficientData`] (a starting point for building test outputs).
    fn default() -> Self {
        use names::*;
        TrendView {
            weight_trend: empty_series(WEIGHT_TREND, "kg", "daily", "Weight trend"),
            weight_slope: empty_series(WEIGHT_SLOPE, "kg/d", "daily", "Weight change per day"),
            weigh_ins: empty_series(WEIGH_INS, "kg", "irregular", "Weigh-ins"),
            weight_slope_28d: None,
            weight_trend_weekly: None,
            plateau_confidence: None,
            plateau_onset: None,
            regain_kg: Interval::default(),
            regain_confidence: None,
            regain_verdict: None,
            periods: vec![],
            source_offsets: vec![],
            weigh_in_steps: vec![],
            current_weight_kg: Interval::default(),
            slope_kg_per_week: Interval::default(),
            theil_sen_slope_kg_per_week: Interval::default(),
            noise_sd_kg: None,
            weigh_ins_used: None,
            outliers_ignored: None,
            days_since_last_weigh_in: None,
            status: Status::InsufficientData,
            flags: vec![],
        }
    }
}

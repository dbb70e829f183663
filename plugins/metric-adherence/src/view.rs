//! The typed view of the `adherence` module's output: what the module writes and what reports
//! read, under one set of names.

use crate::AdherenceModule;
use chrono::NaiveDate;
use cohortpress_metric_api::view::{
    ModuleView, OutputReader, OutputWriter, RowReader, TableRow, TypedFlag, ViewError, cell,
};
use cohortpress_metric_api::{Cell, MetricModule, ModuleSpec, Series, code_enum};

/// Output names of the `adherence` module.
pub mod names {
    /// One row per week (table of [`super::WeekRow`]).
    pub const WEEKLY: &str = "weekly";
    /// Moderate-equivalent minutes per week (series, min).
    pub const WEEKLY_ACTIVITY_MINUTES: &str = "weekly_activity_minutes";
    /// Days with a weigh-in per week (series, d).
    pub const WEEKLY_WEIGH_INS: &str = "weekly_weigh_ins";
    /// Days with a food log per week (series, d).
    pub const WEEKLY_FOOD_LOG_DAYS: &str = "weekly_food_log_days";
    /// Days with a weigh-in per week over the period (scalar, d/wk).
    pub const WEIGH_INS_PER_WEEK: &str = "weigh_ins_per_week";
    /// Food-log days per week over the period (scalar, d/wk).
    pub const FOOD_LOG_DAYS_PER_WEEK: &str = "food_log_days_per_week";
    /// Moderate-equivalent minutes per week over the period (scalar, min/wk).
    pub const ACTIVITY_MINUTES_PER_WEEK: &str = "activity_minutes_per_week";
    /// Sessions offered in the period (scalar).
    pub const SESSIONS_OFFERED: &str = "sessions_offered";
    /// Sessions attended in the period (scalar).
    pub const SESSIONS_ATTENDED: &str = "sessions_attended";
    /// Sessions attended / offered in the period (scalar, %).
    pub const ATTENDANCE_PERCENT: &str = "attendance_percent";
    /// Sessions offered since enrolment (scalar).
    pub const SESSIONS_OFFERED_TO_DATE: &str = "sessions_offered_to_date";
    /// Sessions attended since enrolment (scalar).
    pub const SESSIONS_ATTENDED_TO_DATE: &str = "sessions_attended_to_date";
    /// Sessions attended / offered since enrolment (scalar, %).
    pub const ATTENDANCE_TO_DATE_PERCENT: &str = "attendance_to_date_percent";
    /// Whole weeks (7 covered days) of the period meeting the activity target (scalar, %).
    pub const WEEKS_MEETING_ACTIVITY_TARGET_PERCENT: &str = "weeks_meeting_activity_target_percent";
    /// Longest run of days with a weigh-in (scalar, d).
    pub const LONGEST_WEIGH_IN_STREAK_DAYS: &str = "longest_weigh_in_streak_days";
    /// Longest run of days with no record (scalar, d).
    pub const LONGEST_GAP_DAYS: &str = "longest_gap_days";
    /// Days from the last record to the end of observation (scalar, d).
    pub const DAYS_SINCE_LAST_RECORD: &str = "days_since_last_record";
}

code_enum! {
    /// Flags of the `adherence` module.
    pub enum AdherenceFlag {
        /// No record for `gap_flag_days` days or more.
        Gap = "gap" => "No record for a while",
    }
}

/// Label of the `weekly` table.
pub const WEEKLY_LABEL: &str = "Adherence by week (weeks start on Monday)";

/// One row of the `weekly` table.
#[derive(Debug, Clone, PartialEq)]
pub struct WeekRow {
    /// Monday of the week.
    pub week_start: NaiveDate,
    /// Days of the week in the program.
    pub days_covered: Option<f64>,
    /// Days with a weigh-in.
    pub weigh_ins: Option<f64>,
    /// Days with a food log.
    pub food_log_days: Option<f64>,
    /// Moderate-equivalent activity minutes.
    pub activity_minutes: Option<f64>,
    /// Sessions offered.
    pub sessions_offered: Option<f64>,
    /// Sessions attended.
    pub sessions_attended: Option<f64>,
    /// Weigh-in target met.
    pub met_weigh_in_target: Option<bool>,
    /// Food-log target met.
    pub met_food_log_target: Option<bool>,
    /// Activity target met.
    pub met_activity_target: Option<bool>,
}

impl TableRow for WeekRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("week_start", "", "Week of"),
        ("days_covered", "d", "Days in program"),
        ("weigh_ins", "d", "Days weighed"),
        ("food_log_days", "d", "Days with food log"),
        (
            "activity_minutes",
            "min",
            "Activity minutes (moderate-equivalent)",
        ),
        ("sessions_offered", "", "Sessions offered"),
        ("sessions_attended", "", "Sessions attended"),
        ("met_weigh_in_target", "", "Weigh-in target met"),
        ("met_food_log_target", "", "Food-log target met"),
        ("met_activity_target", "", "Activity target met"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(WeekRow {
            week_start: r.required("week_start", r.date("week_start")?)?,
            days_covered: r.number("days_covered")?,
            weigh_ins: r.number("weigh_ins")?,
            food_log_days: r.number("food_log_days")?,
            activity_minutes: r.number("activity_minutes")?,
            sessions_offered: r.number("sessions_offered")?,
            sessions_attended: r.number("sessions_attended")?,
            met_weigh_in_target: r.yes_no("met_weigh_in_target")?,
            met_food_log_target: r.yes_no("met_food_log_target")?,
            met_activity_target: r.yes_no("met_activity_target")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::date(Some(self.week_start)),
            cell::number(self.days_covered),
            cell::number(self.weigh_ins),
            cell::number(self.food_log_days),
            cell::number(self.activity_minutes),
            cell::number(self.sessions_offered),
            cell::number(self.sessions_attended),
            cell::yes_no(self.met_weigh_in_target),
            cell::yes_no(self.met_food_log_target),
            cell::yes_no(self.met_activity_target),
        ]
    }
}

/// Everything the `adherence` module outputs, typed.
#[derive(Debug, Clone, PartialEq)]
pub struct AdherenceView {
    /// One row per week.
    pub weekly: Vec<WeekRow>,
    /// Moderate-equivalent minutes per week.
    pub weekly_activity_minutes: Series,
    /// Days with a weigh-in per week.
    pub weekly_weigh_ins: Series,
    /// Days with a food log per week.
    pub weekly_food_log_days: Series,
    /// Days with a weigh-in per week over the period.
    pub weigh_ins_per_week: Option<f64>,
    /// Food-log days per week over the period.
    pub food_log_days_per_week: Option<f64>,
    /// Moderate-equivalent minutes per week over the period.
    pub activity_minutes_per_week: Option<f64>,
    /// Sessions offered in the period.
    pub sessions_offered: Option<f64>,
    /// Sessions attended in the period.
    pub sessions_attended: Option<f64>,
    /// Attendance in the period, %.
    pub attendance_percent: Option<f64>,
    /// Sessions offered since enrolment.
    pub sessions_offered_to_date: Option<f64>,
    /// Sessions attended since enrolment.
    pub sessions_attended_to_date: Option<f64>,
    /// Attendance since enrolment, %.
    pub attendance_to_date_percent: Option<f64>,
    /// Whole weeks (7 covered days) of the period meeting the activity target, %.
    pub weeks_meeting_activity_target_percent: Option<f64>,
    /// Longest run of days with a weigh-in.
    pub longest_weigh_in_streak_days: Option<f64>,
    /// Longest run of days with no record.
    pub longest_gap_days: Option<f64>,
    /// Days from the last record to the end of observation.
    pub days_since_last_record: Option<f64>,
    /// Flags.
    pub flags: Vec<TypedFlag<AdherenceFlag>>,
}

impl ModuleView for AdherenceView {
    const MODULE: &'static str = crate::MODULE_ID;

    fn spec() -> ModuleSpec {
        AdherenceModule.spec()
    }

    fn read(r: &OutputReader<'_>) -> Result<Self, ViewError> {
        use names::*;
        Ok(AdherenceView {
            weekly: r.table(WEEKLY)?,
            weekly_activity_minutes: r.series(WEEKLY_ACTIVITY_MINUTES)?,
            weekly_weigh_ins: r.series(WEEKLY_WEIGH_INS)?,
            weekly_food_log_days: r.series(WEEKLY_FOOD_LOG_DAYS)?,
            weigh_ins_per_week: r.scalar(WEIGH_INS_PER_WEEK)?,
            food_log_days_per_week: r.scalar(FOOD_LOG_DAYS_PER_WEEK)?,
            activity_minutes_per_week: r.scalar(ACTIVITY_MINUTES_PER_WEEK)?,
            sessions_offered: r.scalar(SESSIONS_OFFERED)?,
            sessions_attended: r.scalar(SESSIONS_ATTENDED)?,
            attendance_percent: r.scalar(ATTENDANCE_PERCENT)?,
            sessions_offered_to_date: r.scalar(SESSIONS_OFFERED_TO_DATE)?,
            sessions_attended_to_date: r.scalar(SESSIONS_ATTENDED_TO_DATE)?,
            attendance_to_date_percent: r.scalar(ATTENDANCE_TO_DATE_PERCENT)?,
            weeks_meeting_activity_target_percent: r
                .scalar(WEEKS_MEETING_ACTIVITY_TARGET_PERCENT)?,
            longest_weigh_in_streak_days: r.scalar(LONGEST_WEIGH_IN_STREAK_DAYS)?,
            longest_gap_days: r.scalar(LONGEST_GAP_DAYS)?,
            days_since_last_record: r.scalar(DAYS_SINCE_LAST_RECORD)?,
            flags: r.flags()?,
        })
    }

    fn write(&self, w: &mut OutputWriter) {
        use names::*;
        w.table(WEEKLY, WEEKLY_LABEL, &self.weekly);
        w.series(&self.weekly_activity_minutes);
        w.series(&self.weekly_weigh_ins);
        w.series(&self.weekly_food_log_days);
        w.scalar(WEIGH_INS_PER_WEEK, self.weigh_ins_per_week);
        w.scalar(FOOD_LOG_DAYS_PER_WEEK, self.food_log_days_per_week);
        w.scalar(ACTIVITY_MINUTES_PER_WEEK, self.activity_minutes_per_week);
        w.scalar(SESSIONS_OFFERED, self.sessions_offered);
        w.scalar(SESSIONS_ATTENDED, self.sessions_attended);
        w.scalar(ATTENDANCE_PERCENT, self.attendance_percent);
        w.scalar(SESSIONS_OFFERED_TO_DATE, self.sessions_offered_to_date);
        w.scalar(SESSIONS_ATTENDED_TO_DATE, self.sessions_attended_to_date);
        w.scalar(ATTENDANCE_TO_DATE_PERCENT, self.attendance_to_date_percent);
        w.scalar(
            WEEKS_MEETING_ACTIVITY_TARGET_PERCENT,
            self.weeks_meeting_activity_target_percent,
        );
        w.scalar(
            LONGEST_WEIGH_IN_STREAK_DAYS,
            self.longest_weigh_in_streak_days,
        );
        w.scalar(LONGEST_GAP_DAYS, self.longest_gap_days);
        w.scalar(DAYS_SINCE_LAST_RECORD, self.days_since_last_record);
        w.flags(&self.flags);
    }
}

fn empty_series(name: &str, unit: &str, label: &str) -> Series {
    Series {
        name: name.into(),
        unit: unit.into(),
        step: "weekly".into(),
        label: label.into(),
        points: vec![],
    }
}

impl Default for AdherenceView {
    /// No weeks and every value missing (a starting point for building test outputs).
    fn default() -> Self {
        use names::*;
        AdherenceView {
            weekly: vec![],
            weekly_activity_minutes: empty_series(
                WEEKLY_ACTIVITY_MINUTES,
                "min",
                "Activity minutes per week (moderate-equivalent)",
            ),
            weekly_weigh_ins: empty_series(WEEKLY_WEIGH_INS, "d", "Days weighed per week"),
            weekly_food_log_days: empty_series(
                WEEKLY_FOOD_LOG_DAYS,
                "d",
                "Days with a food log per week",
            ),
            weigh_ins_per_week: None,
            food_log_days_per_week: None,
            activity_minutes_per_week: None,
            sessions_offered: None,
            sessions_attended: None,
            attendance_percent: None,
            sessions_offered_to_date: None,
            sessions_attended_to_date: None,
            attendance_to_date_percent: None,
            weeks_meeting_activity_target_percent: None,
            longest_weigh_in_streak_days: None,
            longest_gap_days: None,
            days_since_last_record: None,
            flags: vec![],
        }
    }
}

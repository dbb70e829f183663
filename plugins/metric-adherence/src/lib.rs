//! The built-in `adherence` metric module of cohortpress.
//!
//! It answers "how closely did this participant follow the program, week by week?": days with a
//! weigh-in, days with a food log, activity minutes against the weekly target, group sessions
//! offered and attended, the longest run of daily weigh-ins and the longest run of days with no
//! record at all.
//!
//! # Weeks
//!
//! Weeks are ISO weeks: they start on a **Monday** ([`week_start`]). The weekly table runs from
//! the week that holds the enrolment date to the week that holds the end of observation, which
//! is `period.to` or, for a participant who withdrew earlier, the withdrawal date. Only days from
//! enrolment to the end of observation count ("covered days"); nothing dated after a withdrawal
//! counts. The first and the last week may therefore be partial. In a partial week every weekly
//! target is scaled by `covered days / 7` (a week with 3 covered days and a target of
//! 150 minutes needs 150 × 3/7 ≈ 64.3 minutes); the `days_covered` column shows which weeks
//! were partial.
//!
//! # Activity minutes
//!
//! Activity is counted in *moderate-equivalent minutes*: moderate minutes + 2 × vigorous
//! minutes; light minutes are not counted. Intensity comes from the MET value
//! ([`Intensity::of_met`]: light < 3.0 ≤ moderate < 6.0 ≤ vigorous). The equivalence of one
//! vigorous minute to two moderate minutes and the 150 minutes/week minimum are those of the
//! *Physical Activity Guidelines for Americans*, 2nd ed. (US DHHS 2018) and the WHO *Guidelines on
//! physical activity and sedentary behaviour* (2020).
//!
//! # Period scalars
//!
//! Rates per week use the covered days of the reporting period (`ctx.period`), so a participant
//! who enrolled mid-period is not penalised for the days before enrolment. Under
//! [`MIN_DAYS_FOR_A_WEEKLY_RATE`] covered days there is no rate per week (the three `*_per_week`
//! scalars are empty): scaled to 7 days, two 30-minute walks read "210 minutes a week" and one
//! weigh-in in two days "3.5 days a week", a rate no week has tested. [`period_counts`] gives
//! the counts over those days instead. A week counts towards
//! `weeks_meeting_activity_target_percent` when it overlaps the covered part of the period and
//! is whole (7 covered days: a week that begins before the period is judged with those days,
//! for someone enrolled by then); with no whole week the figure is empty (too little data), never
//! a share of partial weeks judged against scaled targets.
//! Streaks and gaps are computed over the whole program to date.

#![warn(missing_docs)]

use chrono::{Datelike, Duration, NaiveDate};
use cohortpress_metric_api::{
    ActivityEntry, FlagSeverity, Intensity, MetricModule, ModuleContext, ModuleError, ModuleOutput,
    ModuleSpec, OutputSpec, ParticipantData, Point, Series, SettingKind, SettingSpec, Table,
};
use std::collections::{BTreeMap, BTreeSet};

/// Id of this module in `program.yaml`.
pub const MODULE_ID: &str = "adherence";

pub mod view;

use cohortpress_metric_api::view::TableRow;
use view::{AdherenceFlag, WEEKLY_LABEL, WeekRow, names};

/// Default length of a run of days with no record that raises the `gap` flag.
///
/// Two weeks without any record is a common practice threshold for a check-in call.
pub const DEFAULT_GAP_FLAG_DAYS: i64 = 14;

/// The `gap` flag waits for this many times the person's usual spacing of records when that is
/// longer than `gap_flag_days` (program choice: a whole usual interval missed, so a monthly
/// clinic visitor is not asked to check in between visits that are their plan).
pub const GAP_FLAG_SPACING_MULTIPLE: f64 = 2.0;

/// Fewest spacings between record days from which a usual spacing is read (three record days;
/// program choice: one spacing is not yet a habit).
pub const MIN_SPACINGS_FOR_USUAL: usize = 2;

/// Fewer covered days of the reporting period than this give no rate per week (the
/// `*_per_week` scalars are empty): a weekly figure covers a week (common practice).
pub const MIN_DAYS_FOR_A_WEEKLY_RATE: i64 = 7;

/// The reporting period's counts over its covered days (enrolment or the period's start to the
/// period's end or the withdrawal day), the figures behind the rates per week.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PeriodCounts {
    /// Covered days of the period (0 when none).
    pub days: i64,
    /// Days with a weigh-in.
    pub weigh_in_days: usize,
    /// Days with a food log.
    pub food_log_days: usize,
    /// Moderate-equivalent activity minutes; `None` when no activity was logged since enrolment
    /// (unknown, not zero, as for the rate).
    pub activity_minutes: Option<f64>,
}

/// The counts the period's rates per week are taken from, over the same days and records as
/// the module's (`period_to` is the period's last day).
pub fn period_counts(
    data: &ParticipantData,
    period_from: NaiveDate,
    period_to: NaiveDate,
) -> PeriodCounts {
    let span = observation_span(data, period_to);
    let rec = Records::collect(data, span.start, span.end);
    counts_in(&rec, span, period_from)
}

/// Enrolment to the period's end, or to the withdrawal day when that is earlier.
fn observation_span(data: &ParticipantData, period_to: NaiveDate) -> Span {
    let profile = &data.profile;
    let end = match profile.withdrew {
        Some(w) if w < period_to => w,
        _ => period_to,
    };
    Span {
        start: profile.enrolled,
        end,
    }
}

fn counts_in(rec: &Records, span: Span, period_from: NaiveDate) -> PeriodCounts {
    let (pa, pb) = (period_from.max(span.start), span.end);
    PeriodCounts {
        days: span_days(pa, pb),
        weigh_in_days: count_in(&rec.weigh_in_days, pa, pb),
        food_log_days: count_in(&rec.food_days, pa, pb),
        activity_minutes: (!rec.activity_days.is_empty())
            .then(|| sum_in(&rec.activity_minutes, pa, pb)),
    }
}

/// Weekly adherence: weigh-ins, food logs, activity, sessions, streaks and gaps.
#[derive(Debug, Clone, Copy, Default)]
pub struct AdherenceModule;

/// The Monday that starts the ISO week holding `d`.
///
/// # Examples
///
/// ```
/// use chrono::NaiveDate;
/// use cohortpress_metric_adherence::week_start;
/// let sunday = NaiveDate::from_ymd_opt(2027, 3, 7).unwrap();
/// assert_eq!(week_start(sunday), NaiveDate::from_ymd_opt(2027, 3, 1).unwrap());
/// ```
pub fn week_start(d: NaiveDate) -> NaiveDate {
    d - Duration::days(i64::from(d.weekday().num_days_from_monday()))
}

/// Moderate-equivalent minutes of one activity entry.
///
/// # Formula
///
/// moderate → minutes; vigorous → 2 × minutes; light → 0. One vigorous minute counts as two
/// moderate minutes (Physical Activity Guidelines for Americans, 2nd ed., US DHHS 2018; WHO
/// 2020 guidelines on physical activity and sedentary behaviour).
pub fn moderate_equivalent_minutes(entry: &ActivityEntry) -> f64 {
    match Intensity::of_met(entry.met) {
        Intensity::Light => 0.0,
        Intensity::Moderate => entry.minutes,
        Intensity::Vigorous => 2.0 * entry.minutes,
    }
}

/// Days from `a` to `b` inclusive (0 when `b < a`).
fn span_days(a: NaiveDate, b: NaiveDate) -> i64 {
    ((b - a).num_days() + 1).max(0)
}

/// Number of members of `set` in `[a, b]`.
fn count_in(set: &BTreeSet<NaiveDate>, a: NaiveDate, b: NaiveDate) -> usize {
    if b < a { 0 } else { set.range(a..=b).count() }
}

/// Sum of the values of `map` in `[a, b]`.
fn sum_in(map: &BTreeMap<NaiveDate, f64>, a: NaiveDate, b: NaiveDate) -> f64 {
    if b < a {
        0.0
    } else {
        // fold from +0.0: an empty float sum is −0.0, which the tidy files would print as "-0".
        map.range(a..=b).fold(0.0, |acc, (_, v)| acc + v)
    }
}

/// A week of the weekly table, computed once and used by the table, the series and the scalars.
#[derive(Debug, Clone)]
struct Week {
    start: NaiveDate,
    covered: i64,
    weigh_ins: usize,
    food_log_days: usize,
    activity_minutes: f64,
    sessions_offered: usize,
    sessions_attended: usize,
    met_weigh_in: bool,
    met_food_log: bool,
    met_activity: bool,
}

/// The participant's records, reduced to what adherence needs, within the observation window.
struct Records {
    weigh_in_days: BTreeSet<NaiveDate>,
    food_days: BTreeSet<NaiveDate>,
    activity_minutes: BTreeMap<NaiveDate, f64>,
    /// Days with any activity entry, light ones included (they still show engagement).
    activity_days: BTreeSet<NaiveDate>,
    /// (date, attended)
    sessions: Vec<(NaiveDate, bool)>,
}

impl Records {
    fn collect(data: &ParticipantData, start: NaiveDate, end: NaiveDate) -> Self {
        let inside = |d: NaiveDate| d >= start && d <= end;
        let mut activity_minutes = BTreeMap::new();
        let mut activity_days = BTreeSet::new();
        for a in data.activity.iter().filter(|a| inside(a.date)) {
            *activity_minutes.entry(a.date).or_insert(0.0) += moderate_equivalent_minutes(a);
            activity_days.insert(a.date);
        }
        Records {
            weigh_in_days: data
                .weights
                .iter()
                .map(|w| w.date)
                .filter(|d| inside(*d))
                .collect(),
            food_days: data
                .intake
                .iter()
                .map(|i| i.date)
                .filter(|d| inside(*d))
                .collect(),
            activity_minutes,
            activity_days,
            sessions: data
                .sessions
                .iter()
                .filter(|s| inside(s.date))
                .map(|s| (s.date, s.attended))
                .collect(),
        }
    }

    fn sessions_in(&self, a: NaiveDate, b: NaiveDate) -> (usize, usize) {
        let mut offered = 0;
        let mut attended = 0;
        for &(d, att) in &self.sessions {
            if d >= a && d <= b {
                offered += 1;
                attended += usize::from(att);
            }
        }
        (offered, attended)
    }
}

/// Meets `target` per week, scaled to `covered` days? A tiny tolerance keeps a scaled target
/// such as 3 × 7/7 from failing on floating-point round-off.
fn meets(value: f64, target_per_week: f64, covered: i64) -> bool {
    value + 1e-9 >= target_per_week * covered as f64 / 7.0
}

/// Longest run of consecutive days in `days`.
fn longest_streak(days: &BTreeSet<NaiveDate>) -> i64 {
    let mut best = 0;
    let mut run = 0;
    let mut prev: Option<NaiveDate> = None;
    for &d in days {
        run = match prev {
            Some(p) if (d - p).num_days() == 1 => run + 1,
            _ => 1,
        };
        best = best.max(run);
        prev = Some(d);
    }
    best
}

/// Longest run of days in `[start, end]` that are not in `days`, and the run that ends at `end`.
fn gaps(days: &BTreeSet<NaiveDate>, start: NaiveDate, end: NaiveDate) -> (i64, i64) {
    let mut longest = 0;
    let mut prev: Option<NaiveDate> = None;
    for &d in days.range(start..=end) {
        let gap = match prev {
            Some(p) => (d - p).num_days() - 1,
            None => (d - start).num_days(),
        };
        longest = longest.max(gap);
        prev = Some(d);
    }
    let current = match prev {
        Some(p) => (end - p).num_days(),
        None => span_days(start, end),
    };
    (longest.max(current), current)
}

/// Days as the flag's words give them: whole days without a decimal, else one decimal (a
/// median of two spacings may end in .5).
fn format_days(x: f64) -> String {
    if x.fract() == 0.0 {
        format!("{x:.0}")
    } else {
        format!("{x:.1}")
    }
}

/// The person's usual spacing of records, days: the median number of days from one record day
/// in `[start, end]` to the next, from [`MIN_SPACINGS_FOR_USUAL`] spacings on.
fn usual_spacing(days: &BTreeSet<NaiveDate>, start: NaiveDate, end: NaiveDate) -> Option<f64> {
    let in_span: Vec<NaiveDate> = days.range(start..=end).copied().collect();
    let mut spacings: Vec<i64> = in_span
        .windows(2)
        .map(|w| (w[1] - w[0]).num_days())
        .collect();
    if spacings.len() < MIN_SPACINGS_FOR_USUAL {
        return None;
    }
    spacings.sort_unstable();
    let n = spacings.len();
    Some(if n % 2 == 1 {
        spacings[n / 2] as f64
    } else {
        (spacings[n / 2 - 1] + spacings[n / 2]) as f64 / 2.0
    })
}

impl MetricModule for AdherenceModule {
    fn spec(&self) -> ModuleSpec {
        ModuleSpec {
            id: MODULE_ID.into(),
            version: env!("CARGO_PKG_VERSION").into(),
            description:
                "Adherence by Monday-based ISO week: days with a weigh-in, food-log days, \
                moderate-equivalent activity minutes (moderate + 2 × vigorous, by MET intensity; \
                Physical Activity Guidelines for Americans 2nd ed. 2018, WHO 2020), group sessions \
                offered and attended, and whether each weekly target was met (partial weeks scale \
                the target by covered days / 7). Also rates for the reporting period (none under 7 \
                covered days), the longest \
                weigh-in streak and the longest gap without any record."
                    .into(),
            settings: vec![SettingSpec {
                name: "gap_flag_days".into(),
                kind: SettingKind::Integer,
                default: serde_json::json!(DEFAULT_GAP_FLAG_DAYS),
                unit: "d".into(),
                choices: vec![],
                min: Some(1.0),
                max: Some(365.0),
                description: "days without any weigh-in, food log or activity that raise the \
                    `gap` flag (common practice: 14); for someone whose usual spacing of records \
                    (the median days from one record day to the next, from three record days \
                    on) is longer than half of it, the flag waits for twice that spacing"
                    .into(),
            }],
            outputs: vec![
                OutputSpec::new(
                    names::WEEKLY,
                    "table",
                    "",
                    "one row per ISO week with counts and targets met",
                ),
                OutputSpec::new(
                    names::WEEKLY_ACTIVITY_MINUTES,
                    "series",
                    "min",
                    "moderate-equivalent minutes per week",
                ),
                OutputSpec::new(
                    names::WEEKLY_WEIGH_INS,
                    "series",
                    "d",
                    "days with a weigh-in per week",
                ),
                OutputSpec::new(
                    names::WEEKLY_FOOD_LOG_DAYS,
                    "series",
                    "d",
                    "days with a food log per week",
                ),
                OutputSpec::new(
                    names::WEIGH_INS_PER_WEEK,
                    "scalar",
                    "d/wk",
                    "days with a weigh-in per week, period (empty when the period covers fewer than 7 of the participant's days in the program: too few for a rate per week)",
                ),
                OutputSpec::new(
                    names::FOOD_LOG_DAYS_PER_WEEK,
                    "scalar",
                    "d/wk",
                    "food-log days per week, period (empty when the period covers fewer than 7 of the participant's days in the program: too few for a rate per week)",
                ),
                OutputSpec::new(
                    names::ACTIVITY_MINUTES_PER_WEEK,
                    "scalar",
                    "min/wk",
                    "moderate-equivalent minutes per week, period (empty when no activity was logged since enrolment, or when the period covers fewer than 7 of the participant's days in the program: too few for a rate per week)",
                ),
                OutputSpec::new(
                    names::SESSIONS_OFFERED,
                    "scalar",
                    "",
                    "sessions offered in the period",
                )
                .counted(),
                OutputSpec::new(
                    names::SESSIONS_ATTENDED,
                    "scalar",
                    "",
                    "sessions attended in the period",
                )
                .counted(),
                OutputSpec::new(
                    names::ATTENDANCE_PERCENT,
                    "scalar",
                    "%",
                    "sessions attended / offered in the period",
                ),
                OutputSpec::new(
                    names::SESSIONS_OFFERED_TO_DATE,
                    "scalar",
                    "",
                    "sessions offered from enrolment to the end of observation",
                )
                .counted(),
                OutputSpec::new(
                    names::SESSIONS_ATTENDED_TO_DATE,
                    "scalar",
                    "",
                    "sessions attended from enrolment to the end of observation",
                )
                .counted(),
                OutputSpec::new(
                    names::ATTENDANCE_TO_DATE_PERCENT,
                    "scalar",
                    "%",
                    "sessions attended / offered since enrolment",
                ),
                OutputSpec::new(
                    names::WEEKS_MEETING_ACTIVITY_TARGET_PERCENT,
                    "scalar",
                    "%",
                    "whole weeks (7 days followed) of the period meeting the activity target; a week that enrolment, leaving or the period's end cuts short is not judged, and one that begins before the period is judged whole, its days before the period included (empty when no activity was logged since enrolment, or when no whole week of the period was followed: too little data)",
                ),
                OutputSpec::new(
                    names::LONGEST_WEIGH_IN_STREAK_DAYS,
                    "scalar",
                    "d",
                    "longest run of days with a weigh-in, program to date",
                )
                .counted(),
                OutputSpec::new(
                    names::LONGEST_GAP_DAYS,
                    "scalar",
                    "d",
                    "longest run of days with no record, program to date",
                )
                .counted(),
                OutputSpec::new(
                    names::DAYS_SINCE_LAST_RECORD,
                    "scalar",
                    "d",
                    "days from the last weigh-in, food log or activity entry to the end of observation: the period's end, or the day the participant left when that is earlier, records after it not counted (how long before leaving they stopped recording); unlike trend.days_since_last_weigh_in, which runs to the period's end and counts follow-up weigh-ins after leaving",
                )
                .counted(),
                OutputSpec::new(
                    AdherenceFlag::Gap.as_str(),
                    "flag",
                    "",
                    "no record for gap_flag_days days or more, and for twice the person's usual spacing of records or more when that is longer",
                ),
            ],
            requires: vec![],
        }
    }

    fn compute(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError> {
        let profile = &data.profile;
        let span = observation_span(data, ctx.period.to);
        let withdrawn = profile.withdrew.is_some_and(|w| w <= ctx.period.to);
        let rec = Records::collect(data, span.start, span.end);
        let weeks = weeks(&rec, data, span);
        // No activity entry at all from enrolment to the end of observation (no activity.csv,
        // an empty one, or one that could not be read): the activity figures are unknown, not
        // zero. Counted as 0 minutes, a group of people who never logged activity had a median
        // of "0 minutes per week" in the sponsor's report and in the tidy metrics.
        let activity_logged = !rec.activity_days.is_empty();

        let mut output = ModuleOutput::default();
        output.tables.push(weekly_table(&weeks, activity_logged));
        push_weekly_series(&mut output, &weeks, activity_logged);
        push_period_scalars(&mut output, ctx, &rec, &weeks, span, activity_logged);
        push_streaks_and_gap(&mut output, ctx, &rec, span, withdrawn);
        Ok(output)
    }
}

/// The days a participant is followed: enrolment to the end of the period (or withdrawal).
#[derive(Clone, Copy)]
struct Span {
    start: NaiveDate,
    end: NaiveDate,
}

/// Weekly rows, Monday to Sunday, over the span.
fn weeks(rec: &Records, data: &ParticipantData, span: Span) -> Vec<Week> {
    let targets = &data.profile.targets;
    let Span { start, end } = span;
    let mut weeks = Vec::new();
    if start <= end {
        let mut ws = week_start(start);
        while ws <= end {
            let we = ws + Duration::days(6);
            let (a, b) = (ws.max(start), we.min(end));
            let covered = span_days(a, b);
            let weigh_ins = count_in(&rec.weigh_in_days, a, b);
            let food_log_days = count_in(&rec.food_days, a, b);
            let activity_minutes = sum_in(&rec.activity_minutes, a, b);
            let (sessions_offered, sessions_attended) = rec.sessions_in(a, b);
            weeks.push(Week {
                start: ws,
                covered,
                weigh_ins,
                food_log_days,
                activity_minutes,
                sessions_offered,
                sessions_attended,
                met_weigh_in: meets(weigh_ins as f64, targets.weigh_ins_per_week, covered),
                met_food_log: meets(
                    food_log_days as f64,
                    targets.food_log_days_per_week,
                    covered,
                ),
                met_activity: meets(activity_minutes, targets.activity_minutes_per_week, covered),
            });
            ws += Duration::days(7);
        }
    }
    weeks
}

/// The `weekly` table (activity columns empty when `activity_logged` is false).
fn weekly_table(weeks: &[Week], activity_logged: bool) -> Table {
    Table {
        name: names::WEEKLY.into(),
        label: WEEKLY_LABEL.into(),
        columns: WeekRow::columns(),
        rows: weeks
            .iter()
            .map(|w| {
                WeekRow {
                    week_start: w.start,
                    days_covered: Some(w.covered as f64),
                    weigh_ins: Some(w.weigh_ins as f64),
                    food_log_days: Some(w.food_log_days as f64),
                    activity_minutes: Some(w.activity_minutes).filter(|_| activity_logged),
                    sessions_offered: Some(w.sessions_offered as f64),
                    sessions_attended: Some(w.sessions_attended as f64),
                    met_weigh_in_target: Some(w.met_weigh_in),
                    met_food_log_target: Some(w.met_food_log),
                    met_activity_target: Some(w.met_activity).filter(|_| activity_logged),
                }
                .write()
            })
            .collect(),
    }
}

/// The weekly series: activity minutes (no points when `activity_logged` is false), days
/// weighed, days with a food log.
fn push_weekly_series(output: &mut ModuleOutput, weeks: &[Week], activity_logged: bool) {
    let series = |name: &str, unit: &str, label: &str, f: &dyn Fn(&Week) -> f64| Series {
        name: name.into(),
        unit: unit.into(),
        step: "weekly".into(),
        label: label.into(),
        points: weeks
            .iter()
            .filter(|_| activity_logged || name != names::WEEKLY_ACTIVITY_MINUTES)
            .map(|w| Point {
                date: w.start,
                value: f(w),
                lower: None,
                upper: None,
            })
            .collect(),
    };
    output.series.push(series(
        names::WEEKLY_ACTIVITY_MINUTES,
        "min",
        "Activity minutes per week (moderate-equivalent)",
        &|w| w.activity_minutes,
    ));
    output.series.push(series(
        names::WEEKLY_WEIGH_INS,
        "d",
        "Days weighed per week",
        &|w| w.weigh_ins as f64,
    ));
    output.series.push(series(
        names::WEEKLY_FOOD_LOG_DAYS,
        "d",
        "Days with a food log per week",
        &|w| w.food_log_days as f64,
    ));
}

/// Reporting-period scalars over the covered part of the period, and sessions to date.
fn push_period_scalars(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    rec: &Records,
    weeks: &[Week],
    span: Span,
    activity_logged: bool,
) {
    let Span { start, end } = span;
    let (pa, pb) = (ctx.period.from.max(start), end);
    let counts = counts_in(rec, span, ctx.period.from);
    let covered = counts.days;
    // Under a week of covered days, no rate: the counts scaled to 7 days would be a rate no
    // week has tested (see MIN_DAYS_FOR_A_WEEKLY_RATE).
    let per_week =
        |n: f64| (covered >= MIN_DAYS_FOR_A_WEEKLY_RATE).then(|| n * 7.0 / covered as f64);
    output.push_scalar(
        names::WEIGH_INS_PER_WEEK,
        per_week(counts.weigh_in_days as f64),
        "d/wk",
        "Days weighed per week",
    );
    output.push_scalar(
        names::FOOD_LOG_DAYS_PER_WEEK,
        per_week(counts.food_log_days as f64),
        "d/wk",
        "Days with a food log per week",
    );
    output.push_scalar(
        names::ACTIVITY_MINUTES_PER_WEEK,
        counts
            .activity_minutes
            .and_then(per_week)
            .filter(|_| activity_logged),
        "min/wk",
        "Activity minutes per week (moderate-equivalent)",
    );
    let (offered, attended) = rec.sessions_in(pa, pb);
    output.push_scalar(
        names::SESSIONS_OFFERED,
        Some(offered as f64),
        "",
        "Sessions offered",
    );
    output.push_scalar(
        names::SESSIONS_ATTENDED,
        Some(attended as f64),
        "",
        "Sessions attended",
    );
    output.push_scalar(
        names::ATTENDANCE_PERCENT,
        (offered > 0).then(|| 100.0 * attended as f64 / offered as f64),
        "%",
        "Sessions attended",
    );
    // Program to date: with monthly reports a period often holds one session or none, so
    // attendance is judged over everything offered since enrolment (as lifestyle-program
    // standards count sessions over months, not weeks).
    let (offered_all, attended_all) = rec.sessions_in(start, end);
    output.push_scalar(
        names::SESSIONS_OFFERED_TO_DATE,
        Some(offered_all as f64),
        "",
        "Sessions offered since enrolment",
    );
    output.push_scalar(
        names::SESSIONS_ATTENDED_TO_DATE,
        Some(attended_all as f64),
        "",
        "Sessions attended since enrolment",
    );
    output.push_scalar(
        names::ATTENDANCE_TO_DATE_PERCENT,
        (offered_all > 0).then(|| 100.0 * attended_all as f64 / offered_all as f64),
        "%",
        "Sessions attended since enrolment",
    );
    // Whole weeks only (7 covered days): a week of a few days is judged against its target
    // scaled to those days, a rate no week has tested (see MIN_DAYS_FOR_A_WEEKLY_RATE). Counted,
    // someone followed for two days of the period (left on its 2nd, or joined two days before
    // its end) with one 45-minute walk read "100 % of weeks meeting the activity target".
    let period_weeks: Vec<&Week> = weeks
        .iter()
        .filter(|w| covered > 0 && w.start <= pb && w.start + Duration::days(6) >= pa)
        .filter(|w| w.covered >= MIN_DAYS_FOR_A_WEEKLY_RATE)
        .collect();
    output.push_scalar(
        names::WEEKS_MEETING_ACTIVITY_TARGET_PERCENT,
        (activity_logged && !period_weeks.is_empty()).then(|| {
            100.0 * period_weeks.iter().filter(|w| w.met_activity).count() as f64
                / period_weeks.len() as f64
        }),
        "%",
        "Weeks meeting the activity target",
    );
}

/// Program-to-date streaks and gaps, and the gap flag.
fn push_streaks_and_gap(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    rec: &Records,
    span: Span,
    withdrawn: bool,
) {
    let Span { start, end } = span;
    let observed = start <= end;
    output.push_scalar(
        names::LONGEST_WEIGH_IN_STREAK_DAYS,
        observed.then(|| longest_streak(&rec.weigh_in_days) as f64),
        "d",
        "Longest run of days weighed",
    );
    let any_record: BTreeSet<NaiveDate> = rec
        .weigh_in_days
        .iter()
        .chain(&rec.food_days)
        .chain(&rec.activity_days)
        .copied()
        .collect();
    let (longest_gap, current_gap) = if observed {
        gaps(&any_record, start, end)
    } else {
        (0, 0)
    };
    output.push_scalar(
        names::LONGEST_GAP_DAYS,
        observed.then_some(longest_gap as f64),
        "d",
        "Longest run of days with no record",
    );
    let last = any_record.last().copied();
    output.push_scalar(
        names::DAYS_SINCE_LAST_RECORD,
        last.map(|l| (end - l).num_days() as f64),
        "d",
        "Days since the last record",
    );

    // A participant who has left is not expected to keep records, so no gap flag for them.
    // The flag is relative to the person's own spacing of records: past `gap_flag_days`, and
    // past twice their usual spacing when that is longer (a monthly clinic weigher read "No
    // weigh-in … for 25 days … A short check-in … may help" every month; tryout24).
    let gap_flag_days = ctx.setting_f64("gap_flag_days", DEFAULT_GAP_FLAG_DAYS as f64);
    let usual = usual_spacing(&any_record, start, end)
        .filter(|u| GAP_FLAG_SPACING_MULTIPLE * u > gap_flag_days);
    let threshold = usual.map_or(gap_flag_days, |u| GAP_FLAG_SPACING_MULTIPLE * u);
    if observed && !withdrawn && current_gap as f64 >= threshold {
        let since = match last {
            Some(l) => format!(" (the last one was on {l})"),
            None => " since enrolment".to_string(),
        };
        let beyond = usual
            .map(|u| {
                format!(
                    ", at least twice the usual {} days between your records",
                    format_days(u)
                )
            })
            .unwrap_or_default();
        output.push_flag(
            AdherenceFlag::Gap.as_str(),
            FlagSeverity::Notice,
            format!(
                "No weigh-in, food log or activity has been recorded for {current_gap} days{since}{beyond}. \
                 A short check-in with the program team may help."
            ),
        );
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(s: &str) -> NaiveDate {
        s.parse().unwrap()
    }

    #[test]
    fn weeks_start_on_monday() {
        // 2027-03-01 is a Monday.
        for day in 1..=7 {
            let date = NaiveDate::from_ymd_opt(2027, 3, day).unwrap();
            assert_eq!(week_start(date), d("2027-03-01"));
        }
        assert_eq!(week_start(d("2027-03-08")), d("2027-03-08"));
    }

    #[test]
    fn an_empty_sum_is_plus_zero() {
        // A week without activity must read 0, not −0 (printed "-0" in the tidy files).
        let mut m = BTreeMap::new();
        m.insert(d("2027-03-10"), 30.0);
        let empty = sum_in(&m, d("2027-03-01"), d("2027-03-07"));
        assert!(empty == 0.0 && empty.is_sign_positive(), "{empty}");
        assert_eq!(sum_in(&m, d("2027-03-01"), d("2027-03-10")), 30.0);
    }

    #[test]
    fn streak_and_gaps() {
        let days: BTreeSet<NaiveDate> = [
            "2027-03-02",
            "2027-03-03",
            "2027-03-04",
            "2027-03-10",
            "2027-03-11",
        ]
        .iter()
        .map(|s| d(s))
        .collect();
        assert_eq!(longest_streak(&days), 3);
        // Leading gap 03-01 (1 day), 03-05..03-09 (5 days), trailing 03-12..03-20 (9 days).
        assert_eq!(gaps(&days, d("2027-03-01"), d("2027-03-20")), (9, 9));
        assert_eq!(gaps(&days, d("2027-03-01"), d("2027-03-12")), (5, 1));
        assert_eq!(
            gaps(&BTreeSet::new(), d("2027-03-01"), d("2027-03-10")),
            (10, 10)
        );
    }

    #[test]
    fn partial_week_scales_the_target() {
        // 3 covered days of a 3-per-week target need 3 × 3/7 ≈ 1.29, so 2 weigh-ins meet it.
        assert!(meets(2.0, 3.0, 3));
        assert!(!meets(1.0, 3.0, 3));
        assert!(meets(3.0, 3.0, 7));
    }
}

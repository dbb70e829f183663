//! The participant report model: everything the participant templates and the PDF layout show,
//! built once from the module outputs so both formats print the same figures.

use super::Scope;
use super::format as fmt;
use super::guidance::{self, GuidanceView};
use super::{ChartView, Kv, TableView, cautions};
use crate::diag::{Diagnostic, Severity};
use crate::modules::run::seen_at_follow_up;
use crate::modules::{BuiltinViews, ModuleResults, views::BUILTIN};
use crate::render::chart::{
    BandSeries, Bar, BarChart, Chart, HLine, LineChart, LineSeries, LineStyle, Span, SpanKind,
    VLine,
};
use chrono::{Datelike as _, NaiveDate};
use cohortpress_metric_adherence::view::AdherenceView as AdherenceResults;
// The fewest days of a period with a rate per week: the module gives none under it.
use cohortpress_metric_adherence::{MIN_DAYS_FOR_A_WEEKLY_RATE, PeriodCounts, period_counts};
use cohortpress_metric_api::view::{Code, Interval};
use cohortpress_metric_api::{FlagSeverity, LabTest, ParticipantData, Profile, UnitSystem};
use cohortpress_metric_energy::view::{EnergyView as EnergyResults, PlateauCause, PlateauRow};
use cohortpress_metric_outcomes::view::{BmiCategory, OutcomesView};
use cohortpress_metric_trend::view::{PeriodKind, Status, TrendView};
use serde::Serialize;

/// What the participant templates see (documented field by field in
/// `report-templates/CONTEXT.md`).
#[derive(Debug, Clone, Serialize)]
pub struct ParticipantReportContext {
    /// Program and period.
    pub program: super::ProgramView,
    /// Who the report is for.
    pub participant: PersonView,
    /// One-line status in plain words.
    pub headline: String,
    /// Key figures (label, value).
    pub summary: Vec<Kv>,
    /// Milestones (3, 5, 7, 10 %).
    pub milestones: Vec<MilestoneView>,
    /// Weight chart (title, alt text, data table; the SVG is added at render time).
    pub weight_chart: ChartView,
    /// Energy balance section, when the energy module ran.
    pub energy: Option<EnergyView>,
    /// Adherence section, when the adherence module ran.
    pub adherence: Option<AdherenceView>,
    /// Plateau assessments, when a plateau was found.
    pub plateaus: Vec<PlateauView>,
    /// "What to try next": the guidance the decision table chose (see [`super::guidance`]).
    pub guidance: GuidanceView,
    /// Lab values with categories: the latest [`MAX_LAB_ROWS_SHOWN`] of them.
    pub labs: Option<TableView>,
    /// How many earlier lab values the table leaves out, in words (`None` when it shows all).
    pub labs_not_shown: Option<String>,
    /// The footnote under the lab table: the source of the ranges of the tests it lists, each
    /// named only when a row of that test is listed ([`labs_sources`]).
    pub labs_sources: Option<String>,
    /// Flags raised by the modules (clinical ones first).
    pub flags: Vec<FlagView>,
    /// Why the figures may not be this participant's at all, shown before them: their
    /// weigh-ins are a copy of another participant folder's (which is not named).
    pub record_notice: Option<String>,
    /// Data problems found in this participant's files.
    pub data_notes: Vec<String>,
    /// Modules that failed for this participant.
    pub module_failures: Vec<String>,
    /// Values from other (external) modules.
    pub extra: Vec<ExtraView>,
    /// The cautions printed on every participant report.
    pub cautions: Vec<String>,
}

/// The participant.
#[derive(Debug, Clone, Serialize)]
pub struct PersonView {
    /// Participant id.
    pub id: String,
    /// Name if given, else the id.
    pub display_name: String,
    /// Facts about the participant (label, value).
    pub facts: Vec<Kv>,
}

/// One milestone.
#[derive(Debug, Clone, Serialize)]
pub struct MilestoneView {
    /// `5 % loss`.
    pub label: String,
    /// Reached?
    pub reached: bool,
    /// When, if reached (or first seen at follow-up).
    pub reached_on: String,
    /// First reached after leaving, on follow-up weigh-ins of someone who stopped the program:
    /// not reached in the program (`reached` is false).
    pub follow_up: bool,
}

/// Energy-balance section.
#[derive(Debug, Clone, Serialize)]
pub struct EnergyView {
    /// Key figures.
    pub items: Vec<Kv>,
    /// Short explanation of what the figures mean.
    pub explanation: String,
    /// Weekly table and chart.
    pub chart: ChartView,
}

/// Adherence section.
#[derive(Debug, Clone, Serialize)]
pub struct AdherenceView {
    /// Key figures.
    pub items: Vec<Kv>,
    /// Weekly activity chart with its data table (all weekly columns).
    pub chart: ChartView,
}

/// One plateau and what it most likely is.
#[derive(Debug, Clone, Serialize)]
pub struct PlateauView {
    /// `12 Jul 2026 – 20 Aug 2026`.
    pub period: String,
    /// Plain-words classification.
    pub verdict: String,
    /// The numbers behind it.
    pub evidence: String,
}

/// A flag shown to the participant.
#[derive(Debug, Clone, Serialize)]
pub struct FlagView {
    /// `clinical`, `notice` or `info`.
    pub severity: String,
    /// For review by a licensed clinician?
    pub clinical: bool,
    /// The message (for a flag seen at follow-up, ending with a sentence that says so).
    pub message: String,
    /// Seen at follow-up only: raised by weigh-ins after the day someone who stopped the
    /// program left it, and not by their records up to that day.
    pub follow_up: bool,
}

/// Values of another module.
#[derive(Debug, Clone, Serialize)]
pub struct ExtraView {
    /// Module id.
    pub module: String,
    /// Its scalars and texts.
    pub items: Vec<Kv>,
}

/// The participant model plus its charts (charts are drawn per format at render time).
pub struct ParticipantReport {
    /// The template context.
    pub ctx: ParticipantReportContext,
    /// Weight chart.
    pub weight_chart: Chart,
    /// Weekly energy chart, when present.
    pub energy_chart: Option<Chart>,
    /// Weekly activity chart, when present.
    pub activity_chart: Option<Chart>,
}

/// A number as the module tables print it: whole numbers without decimals, others with one;
/// a missing one is empty.
fn num_text(x: Option<f64>) -> String {
    match x {
        Some(n) => fmt::fixed(n, if n.fract() == 0.0 { 0 } else { 1 }),
        None => String::new(),
    }
}

/// Clinical flags that say the loss itself may be unsafe (too fast, or on too little food):
/// a report carrying one shows no loss milestones as reached.
const UNSAFE_LOSS_FLAGS: [&str; 6] = [
    "fast_loss",
    "very_low_intake",
    "low_intake",
    "below_resting_intake",
    "very_low_implied_intake",
    "forecast_underweight",
];

/// Builds the participant report, section by section.
pub fn build(
    plan: &Scope<'_>,
    data: &ParticipantData,
    results: &ModuleResults,
    diags: &[Diagnostic],
) -> ParticipantReport {
    let units = plan.program.info.units;
    let p = &data.profile;
    let v = results.views();
    let left = p.withdrew.filter(|w| *w <= plan.period.to);

    // Whether loss is a goal at all: below the loss BMI cut-off (normal weight, underweight)
    // the report shows no target weight below the person's own and no loss milestone "not yet"
    // reached, which would read as advice to lose.
    let thresholds = guidance::Thresholds::from_plan(plan);
    let state = guidance::state_of(plan, data, results);
    let no_loss = guidance::bmi_rules_out_loss(&state, &thresholds);
    let loss_goal = guidance::loss_is_goal(&state, &thresholds);
    // A loss milestone shown as reached reads as praise for losing. Someone whose BMI is now
    // in the underweight range or flagged low (BMI 17.0 read a green "3 % loss · reached"), who
    // is pregnant, or whose loss was never a goal (a starting BMI already below the loss
    // cut-off, where the report says the weight need not come down) sees no loss milestones.
    // Nor does someone whose loss or intake is flagged for a clinician: "10 % loss · reached"
    // in green sat above "weight came down faster than 1 kg a week" and an intake below
    // resting energy (sample program, September, SG-050).
    let praise_loss =
        !(state.clinical_flags.iter().any(|c| {
            c == "low_bmi" || c == "pregnancy" || UNSAFE_LOSS_FLAGS.contains(&c.as_str())
        }) || state
            .bmi
            .is_some_and(|b| guidance::bmi_below(b, thresholds.underweight_bmi_below))
            || v.outcomes
                .as_ref()
                .and_then(|o| o.bmi_baseline_kg_m2)
                .is_some_and(|b| guidance::bmi_below(b, thresholds.loss_cut(state.older))));

    // Weight chart, with the target weight when there is a starting weight.
    let target_kg = v
        .outcomes
        .as_ref()
        .and_then(|o| o.baseline_weight_kg)
        .filter(|_| !(no_loss && p.targets.weight_change_percent < 0.0))
        .map(|b| b * (1.0 + p.targets.weight_change_percent / 100.0));
    // Someone who stopped the program: the day they left is marked, and the weigh-ins after
    // it (follow-up) are seen to be after it.
    let left_follow_up = left.filter(|_| p.follow_up_weigh_ins());
    // Someone who withdrew (consent) within or before the period has no records after that
    // day, and the chart's axis stops there: its description ran to the period's end (sample
    // program, September 2026, SG-018: "Weight chart for 1 Apr 2026 to 30 Sep 2026" above an
    // axis that ends in late July).
    let chart_to = left
        .filter(|_| left_follow_up.is_none())
        .unwrap_or(plan.period.to);
    let (weight_chart, weight_view) = weight_chart(
        &v,
        target_kg,
        units,
        plan,
        p.enrolled,
        left_follow_up,
        chart_to,
    );

    // Someone who never logged activity read "Activity minutes per week 0 (target 150)" and
    // "Activity, beyond resting 0 kcal/day", as if they had done none (the module counts no log
    // as no minutes; the energy model's activity level stands for everyday activity).
    let unread = match activity_unread(diags) {
        ActivityUnread::Nothing if !data.activity.iter().any(|a| a.date <= plan.period.to) => {
            ActivityUnread::NoLog
        }
        u => u,
    };
    // Weeks are named by their Monday, and a participant's first week starts before they
    // enrolled: every sample report's tables read "Week of 30 Mar 2026" in a program that
    // began on 1 April (and "21 Dec 2026" for one that began on Saturday 26 December). The
    // tables and charts name such a week by its first day in the participant's span instead.
    let first_day = p.enrolled.max(plan.program.info.start);
    let energy_clipped = v.energy.as_ref().map(|e| {
        let mut e = e.clone();
        for w in &mut e.weekly_energy {
            w.week_start = week_named_from(w.week_start, first_day);
        }
        e
    });
    let adherence_clipped = v.adherence.as_ref().map(|a| {
        let mut a = a.clone();
        for w in &mut a.weekly {
            w.week_start = week_named_from(w.week_start, first_day);
        }
        a
    });
    let (energy_view, energy_chart) = match &energy_clipped {
        Some(e) => {
            let window_days = plan
                .modules
                .settings("energy")
                .and_then(|s| s.get("window_days"))
                .and_then(|v| v.as_f64())
                .unwrap_or(28.0)
                .round()
                .max(1.0) as u64;
            let span = energy_window_words(window_days, p.enrolled, plan.period.to);
            // Someone who stopped the program and weighed in after: the energy figures come
            // from the records up to that day (`modules::run::PROGRAM_DAYS_ONLY`). Only
            // weigh-ins within the period count: a report for 1–15 Sep 2026 of someone who
            // left on 8 Sep spoke of "your follow-up weigh-ins after it" when run after their
            // follow-up visit on 28 Sep, which it does not show, and not when run before it.
            let follow_up_after = left.filter(|w| {
                p.follow_up_weigh_ins()
                    && *w >= plan.period.from
                    && data
                        .weights
                        .iter()
                        .any(|x| x.date > *w && x.date <= plan.period.to)
            });
            let (mut view, chart) = energy_section(
                e,
                &span,
                left.filter(|w| *w < plan.period.from),
                unread == ActivityUnread::NoLog,
            );
            // A record that stopped four weeks or more before the period's end: "Where you
            // stand" gives "Weight at your last weigh-in (27 Aug 2026, trend)", and resting
            // energy is at that weight, yet it read "at your current weight" (sample, September
            // 2026, SG-015 and SG-019), as it did for someone who left before the period until
            // that was mended.
            if v.trend
                .as_ref()
                .and_then(|t| t.days_since_last_weigh_in)
                .is_some_and(|d| d >= guidance::RECENT_WEIGH_IN_DAYS)
            {
                for k in view.items.iter_mut().filter(|k| k.label == RESTING_LABEL) {
                    k.label = RESTING_LABEL_LEFT.into();
                }
            }
            // The weeks the energy module read off a trend: for someone who stopped the
            // program, it was given the records up to the day they left, whose trend ends at
            // the last weigh-in on or before it, not the trend the chart draws through their
            // follow-up weigh-ins. Weeks between that weigh-in and the day they left have no
            // implied intake for want of a trend, not because the weight moved implausibly
            // (own trial, LI-004: last weigh-in 2 Jun, left 20 Jun; the note blamed a fall or
            // rise for the weeks of 8 and 15 June).
            let energy_trend_end = p.withdrew.filter(|_| p.follow_up_weigh_ins()).map(|w| {
                data.weights
                    .iter()
                    .map(|x| x.date)
                    .filter(|d| *d <= w)
                    .max()
            });
            let trend_span = v.trend.as_ref().and_then(|t| {
                let pts = &t.weight_trend.points;
                let (first, last) = (pts.first()?.date, pts.last()?.date);
                match energy_trend_end {
                    Some(end) => {
                        let end = end?.min(last);
                        (end >= first).then_some((first, end))
                    }
                    None => Some((first, last)),
                }
            });
            if let Some(note) = implied_gap_note(&e.weekly_energy, trend_span) {
                view.chart.alt.push_str(note);
            }
            if p.sex.is_none() && left.is_none_or(|w| w >= plan.period.from) {
                view.explanation.push_str(SEX_NOT_RECORDED_WORDS);
            }
            if let Some(w) = follow_up_after {
                view.explanation.push_str(&format!(
                    " These figures use your records up to {}, the day you left: your food and activity logs end there, so your follow-up weigh-ins after it are not set against them.",
                    fmt::date(w)
                ));
            }
            (Some(view), chart)
        }
        None => (None, None),
    };
    let (adherence_view, activity_chart) = match &adherence_clipped {
        Some(a) => {
            // The period's counts and the days they are taken over, as the module counts
            // them: from enrolment (or the period's start) to the period's end or the day they
            // left.
            let (view, chart) = adherence_section(
                a,
                p.targets.activity_minutes_per_week,
                &unread,
                &super::ProgramView::new(plan).period_label,
                &period_counts(data, plan.period.from, plan.period.to),
            );
            (Some(view), Some(chart))
        }
        None => (None, None),
    };

    let guidance = guidance::build(plan, data, results);
    // Plateau readings belong with advice to restart a loss; for anyone else (past the target,
    // regaining, withdrawn, for a clinician first) they would invite the wrong action.
    let plateaus = if guidance.show_plateaus {
        latest_plateau(v.energy.as_ref(), plan.period.from, units)
    } else {
        Vec::new()
    };

    // Weigh-ins on one day only: that day's mean is both the starting weight and the last one,
    // so no change has been measured (one weigh-in in June 2025, November 2026's report read
    // "Since you started: 0.0 kg", as if the weight had held for 18 months).
    let weigh_days = {
        let mut days = crate::modules::run::weigh_in_days(data, plan.period.to);
        days.dedup();
        days
    };
    let change_measured = weigh_days.len() != 1;
    let ctx = ParticipantReportContext {
        program: super::ProgramView::new(plan),
        participant: PersonView {
            id: p.id.clone(),
            display_name: p.name.clone().unwrap_or_else(|| p.id.clone()),
            facts: person_facts(p, units),
        },
        headline: headline(
            v.trend.as_ref(),
            v.outcomes.as_ref().filter(|_| change_measured),
            units,
            left.map(|w| (w, p.follow_up_weigh_ins())),
            // Joined within the last four weeks of the period: the trend has had no four
            // weeks to show.
            Some(p.enrolled).filter(|e| *e > plan.period.to - chrono::Duration::days(28)),
            // Weighed in as often as the target asks this period: more weigh-ins are then not
            // what an unclear trend needs. Under a week there is no rate: the count against
            // the target scaled to those days, as the module judges a partial week.
            v.adherence.as_ref().is_some_and(|a| {
                let c = period_counts(data, plan.period.from, plan.period.to);
                match a.weigh_ins_per_week {
                    Some(w) => w >= p.targets.weigh_ins_per_week,
                    None => {
                        c.days > 0
                            && c.weigh_in_days as f64 + 1e-9
                                >= p.targets.weigh_ins_per_week * c.days as f64 / 7.0
                    }
                }
            }),
            !data.weights.iter().any(|w| w.date <= plan.period.to),
            {
                let from = plan.period.to - chrono::Duration::days(27);
                weigh_days.iter().filter(|d| **d >= from).count()
            },
        ),
        summary: {
            let mut rows = summary(
                &v,
                units,
                plan.period.to,
                change_measured,
                data.weights
                    .iter()
                    .map(|w| w.date)
                    .filter(|d| *d <= plan.period.to)
                    .max(),
                plan.modules
                    .settings("trend")
                    .and_then(|s| s.get("plateau_band_percent_per_week"))
                    .and_then(serde_json::Value::as_f64)
                    .unwrap_or(0.25),
            );
            if !rows.is_empty()
                && let Some(words) = away_scale_words(&data.weights, plan.period.to, units)
            {
                rows.push(Kv::new("Weighed", &words));
            }
            rows
        },
        milestones: v
            .outcomes
            .as_ref()
            .filter(|_| praise_loss)
            .map(|o| {
                let days = crate::modules::run::weigh_in_days(data, plan.period.to);
                milestones(
                    &o.milestones,
                    loss_goal,
                    left.is_some(),
                    p.withdrew.filter(|_| p.follow_up_weigh_ins()),
                    &days,
                )
            })
            .unwrap_or_default(),
        weight_chart: weight_view,
        energy: energy_view,
        adherence: adherence_view,
        plateaus,
        guidance,
        labs: v.outcomes.as_ref().and_then(labs),
        labs_not_shown: v.outcomes.as_ref().and_then(labs_not_shown),
        labs_sources: v.outcomes.as_ref().and_then(labs_sources),
        flags: flags(results, p.withdrew.filter(|_| p.follow_up_weigh_ins())),
        record_notice: diags
            .iter()
            .any(crate::participant::is_copy_of_another)
            .then(|| COPY_NOTICE.to_string()),
        data_notes: data_notes(diags),
        module_failures: results
            .failures
            .iter()
            .map(|f| format!("{}: {}", f.module, f.for_outputs()))
            .collect(),
        extra: extra_modules(results),
        cautions: cautions::participant(&thresholds),
    };
    ParticipantReport {
        ctx,
        weight_chart,
        energy_chart,
        activity_chart,
    }
}

/// Facts about the participant (id, enrolment, height, groups).
fn person_facts(p: &Profile, units: UnitSystem) -> Vec<Kv> {
    let mut facts = vec![Kv::new("Participant id", &p.id)];
    facts.push(Kv::new("Enrolled", &fmt::date(p.enrolled)));
    if let Some(w) = p.withdrew {
        facts.push(Kv::new("Left the program", &fmt::date(w)));
    }
    facts.push(Kv::new("Height", &fmt::height(p.height.cm(), units)));
    for (k, v) in &p.groups {
        facts.push(Kv::new(&fmt::capitalise(k), v));
    }
    facts
}

/// The weight the summary prints as current (or as at the last weigh-in): the trend's, else
/// the outcomes module's.
fn shown_current_kg(trend: Option<&TrendView>, outcomes: Option<&OutcomesView>) -> Option<f64> {
    trend
        .and_then(|t| t.current_weight_kg.value)
        .or(outcomes.and_then(|o| o.current_weight_kg.value))
}

/// The change since the start in words, for the summary and the headline: the difference of the
/// starting and current weights as the summary prints them, so the three figures add up (demo,
/// 150, September: SG-046 read 86.0 kg, 83.2 kg and "−2.9 kg"); the module's own change when
/// either weight is missing.
fn change_words(
    trend: Option<&TrendView>,
    outcomes: Option<&OutcomesView>,
    units: UnitSystem,
) -> Option<String> {
    let baseline = outcomes.and_then(|o| o.baseline_weight_kg);
    match (baseline, shown_current_kg(trend, outcomes)) {
        (Some(b), Some(c)) if b.is_finite() && c.is_finite() => {
            Some(fmt::weight_change_between(b, c, units))
        }
        _ => outcomes
            .and_then(|o| o.change_kg)
            .map(|c| fmt::weight_change(c, units)),
    }
}

/// Key figures: current and starting weight, change, recent rate, BMI. `to` is the period's
/// last day, `last_weigh_in` the day of the last weigh-in up to it; `change_measured` is false
/// when every weigh-in is of one day, so the starting and last weights are the same reading.
fn summary(
    v: &BuiltinViews,
    units: UnitSystem,
    to: NaiveDate,
    change_measured: bool,
    last_weigh_in: Option<NaiveDate>,
    band_percent_per_week: f64,
) -> Vec<Kv> {
    let (trend, outcomes) = (v.trend.as_ref(), v.outcomes.as_ref());
    let mut summary = Vec::new();
    if let Some(w) = shown_current_kg(trend, outcomes) {
        // The trend ends at the last weigh-in: months later it is that day's weight, not a
        // current one (someone who stopped recording in July read "Current weight" in a
        // September report).
        let label = match trend.and_then(|t| t.days_since_last_weigh_in) {
            // Without a trend (two weigh-ins in three months) the figure is the last
            // weigh-in itself, not a trend: it read "Current weight (trend)".
            _ if trend.and_then(|t| t.current_weight_kg.value).is_none() => match last_weigh_in {
                Some(d) => format!("Weight at your last weigh-in ({})", fmt::date(d)),
                None => "Weight at your last weigh-in".to_string(),
            },
            Some(d) if d >= guidance::RECENT_WEIGH_IN_DAYS => format!(
                "Weight at your last weigh-in ({}, trend)",
                fmt::date(to - chrono::Duration::days(d.round() as i64))
            ),
            _ => "Current weight (trend)".to_string(),
        };
        summary.push(Kv::new(&label, &fmt::weight(w, units)));
    }
    if let Some(b) = outcomes.and_then(|o| o.baseline_weight_kg) {
        summary.push(Kv::new("Starting weight", &fmt::weight(b, units)));
    }
    if !change_measured {
        if outcomes.and_then(|o| o.baseline_weight_kg).is_some() {
            summary.push(Kv::new(
                "Change since start",
                "not known yet: your weigh-ins so far are all of one day",
            ));
        }
    } else if let (Some(c), Some(pc)) = (
        change_words(trend, outcomes, units),
        outcomes.and_then(|o| o.change_percent),
    ) {
        summary.push(Kv::new(
            "Change since start",
            &format!("{c} ({})", fmt::percent_change(pc)),
        ));
    }
    // With too few recent weigh-ins the headline says the movement cannot be seen; a rate
    // beside it (from a week of data, or weekends only) would say the opposite.
    if let Some((t, r)) = trend
        .filter(|t| t.status != Status::InsufficientData)
        .and_then(|t| Some((t, t.slope_kg_per_week.value?)))
    {
        // A rate the weigh-ins do not pin down gets its 95 % range, as the headline gives it
        // for `unclear`: a plateau resting on one weigh-in in four weeks read "0.00 kg/week"
        // here, from a slope of −0.002 kg/week whose range was −0.67 to +0.67 (sample, SG-046).
        let range = if t.status == Status::Unclear || slope_is_wide(t, band_percent_per_week) {
            slope_range(t, units)
        } else {
            String::new()
        };
        summary.push(Kv::new(
            "Recent rate (last 4 weeks)",
            &format!("{}{range}", fmt::rate_per_week(r, units)),
        ));
    }
    // A rise from the lowest trend weight, once the level test confirms it.
    if let Some((rise, range)) = trend.and_then(|t| guidance::regain_rise(t, units)) {
        summary.push(Kv::new(
            "Back up from your lowest",
            &format!("{}{range}", fmt::weight_change(rise, units)),
        ));
    }
    if let Some(o) = outcomes
        && let Some(bmi) = o.bmi_current_kg_m2
    {
        summary.push(Kv::new("BMI", &bmi_text(bmi, o.bmi_category_current)));
    }
    // Someone who has never weighed in: "Where you stand" was a heading over nothing.
    if summary.is_empty() && last_weigh_in.is_none() {
        summary.push(Kv::new("Weight", "no weigh-in recorded yet"));
    }
    summary
}

/// What "Where you stand" says of someone whose every weigh-in up to `to` comes from a scale
/// other than their own (`source` set and not naming "home": a clinic's, a pharmacy's), `None`
/// otherwise. The trend takes a source's offset (clothes and shoes, another scale) off its
/// readings only against at least 10 days of home weigh-ins, so such a person's current and
/// starting weight and BMI are as that scale read them: a participant weighed clothed at the
/// clinic once a month read "Current weight (trend) 92.4 kg" and "BMI 35.2" with no word that
/// they include what she wore (tryout24). Clothes and shoes weigh about 0.5–1.5 kg (common
/// practice, as the trend's prior says). The change since the start is not affected when
/// every weigh-in is taken the same way.
fn away_scale_words(
    weights: &[cohortpress_metric_api::WeighIn],
    to: NaiveDate,
    units: UnitSystem,
) -> Option<String> {
    let mut sources = std::collections::BTreeSet::new();
    for w in weights.iter().filter(|w| w.date <= to) {
        match w.source.as_deref() {
            Some(s) if !cohortpress_metric_trend::is_home_source(Some(s)) => {
                sources.insert(s);
            }
            _ => return None,
        }
    }
    if sources.is_empty() {
        return None;
    }
    let names: Vec<String> = sources
        .iter()
        .take(3)
        .map(|s| {
            let mut name: String = s.chars().take(40).collect();
            if name.len() < s.len() {
                name.push('…');
            }
            format!("“{name}”")
        })
        .collect();
    let more = match sources.len() {
        n if n > 3 => format!(" and {} more", n - 3),
        _ => String::new(),
    };
    Some(format!(
        "only on a scale other than your own (your weigh-ins are marked {}{more}), so the \
         weights and BMI above are as that scale read them, with whatever you wore (clothes and \
         shoes often add {} to {}); without weigh-ins on a home scale that part cannot be \
         taken off. Your change since you started is not affected when you are weighed the same \
         way each time.",
        names.join(", "),
        fmt::weight(0.5, units),
        fmt::weight(1.5, units),
    ))
}

/// The BMI row: the BMI to one decimal, never rounded across the range its WHO class names
/// (`cohortpress_metric_outcomes::bmi_one_decimal`), and that range in words.
fn bmi_text(bmi: f64, category: Option<BmiCategory>) -> String {
    format!(
        "{} kg/m²{}",
        fmt::fixed(cohortpress_metric_outcomes::bmi_one_decimal(bmi), 1),
        bmi_range_words(category)
    )
}

/// Milestones (3, 5, 7, 10 % loss) and when they were reached; when loss is not the goal
/// (target reached, a BMI below the loss cut-off, a target that is not a loss) or the person
/// has left the program (sample program, September 2026, SG-018, who left on 27 July: "5 %
/// loss · not yet" in a report that sums up their records), only those already reached.
///
/// For someone who stopped the program (`follow_up_after`, their `withdrew` day), a milestone
/// the trend first reached after that day, on follow-up weigh-ins, was not reached in the
/// program: it is shown as seen at follow-up (with `withdrawal_reason: stopped_program`, a
/// follow-up weigh-in on 20 Sep 2026 showed SG-018, who left on 27 Jul, as "5 % loss · reached
/// 3 Aug 2026"). The group report's milestone shares are time-point changes (BOCF), which may
/// use follow-up weigh-ins (intention to treat).
///
/// The date of a milestone seen at follow-up is the first weigh-in on or after the day the
/// trend crossed it (`weigh_in_days`, sorted): between leaving and a follow-up visit there are
/// no weigh-ins, and the trend's crossing day is a point on a line drawn across the gap ("seen
/// at follow-up 3 Aug" for a follow-up weigh-in on 20 Sep).
fn milestones(
    rows: &[cohortpress_metric_outcomes::view::MilestoneRow],
    loss_goal: bool,
    left: bool,
    follow_up_after: Option<NaiveDate>,
    weigh_in_days: &[NaiveDate],
) -> Vec<MilestoneView> {
    rows.iter()
        .filter(|m| (loss_goal && !left) || m.reached)
        .map(|m| {
            let seen = m
                .date_reached
                .filter(|_| m.reached)
                .and_then(|d| seen_at_follow_up(follow_up_after, weigh_in_days, d));
            let follow_up = seen.is_some();
            let on = seen.or(m.date_reached);
            MilestoneView {
                label: format!("{} % loss", num_text(Some(m.threshold_percent))),
                reached: m.reached && !follow_up,
                reached_on: on.map(fmt::date).unwrap_or_default(),
                follow_up,
            }
        })
        .collect()
}

/// The latest plateau that reaches into the last four weeks before the period, with its
/// reading. Older ones are history (still shaded on the weight chart), not something to act
/// on now; overlapping readings of one stall would say the same thing several times.
fn latest_plateau(
    energy: Option<&EnergyResults>,
    period_from: NaiveDate,
    units: UnitSystem,
) -> Vec<PlateauView> {
    let recent = period_from - chrono::Duration::days(28);
    energy
        .and_then(|e| e.plateau_assessment.iter().rfind(|r| r.end >= recent))
        .map(|r| PlateauView {
            period: format!("{} – {}", fmt::date(r.start), fmt::date(r.end)),
            verdict: plateau_verdict(r.classification).to_string(),
            evidence: plateau_evidence(r, units),
        })
        .into_iter()
        .collect()
}

fn plateau_verdict(c: PlateauCause) -> &'static str {
    match c {
        PlateauCause::ExpectedSlowdown => {
            "The slowdown expected at your new, lower weight: your body now uses less energy than when you started."
        }
        PlateauCause::IntakeDrift => {
            "Most likely a gradual rise in how much is eaten: the weight trend implies a higher intake than before the plateau."
        }
        PlateauCause::Undetermined => {
            "The records do not yet show clearly whether this is the expected slowdown at a lower weight or a gradual rise in how much is eaten."
        }
    }
}

/// The most lab values a participant report lists: the latest ones, in the order of the file
/// (a program choice: five tests a month for four years). Every row costs the page and the PDF
/// layout alike, and nothing bounded the table: a `labs.csv` of 50,000 rows (a whole clinic's
/// export in one folder) made a 31 MB PDF of 35,000 rows, and 710 MB of memory and 7 s for
/// that one participant, on every worker thread that met such a folder.
pub const MAX_LAB_ROWS_SHOWN: usize = 250;

/// The indices of the lab values the report lists: the latest [`MAX_LAB_ROWS_SHOWN`] by date
/// (of one date, those further down the file), in the order of the file.
fn labs_shown(o: &OutcomesView) -> Vec<usize> {
    let mut by_date: Vec<usize> = (0..o.labs.len()).collect();
    by_date.sort_by_key(|&i| o.labs[i].date);
    let mut kept = by_date.split_off(by_date.len().saturating_sub(MAX_LAB_ROWS_SHOWN));
    kept.sort_unstable();
    kept
}

/// The sentence under a lab table that lists only the latest values.
fn labs_not_shown(o: &OutcomesView) -> Option<String> {
    let left_out = o.labs.len().saturating_sub(MAX_LAB_ROWS_SHOWN);
    (left_out > 0).then(|| {
        format!(
            "The table lists your latest {} results; {} earlier {} not shown here (your program team has them).",
            fmt::int(MAX_LAB_ROWS_SHOWN as f64),
            fmt::int(left_out as f64),
            if left_out == 1 { "one is" } else { "ones are" }
        )
    })
}

/// The footnote under the lab table: whose ranges each listed test follows, for the tests it
/// lists only. One sentence ("Ranges follow the American Diabetes Association's Standards of
/// Care") stood under blood-pressure and waist rows too, which the ADA does not class here.
fn labs_sources(o: &OutcomesView) -> Option<String> {
    let shown = labs_shown(o);
    if shown.is_empty() {
        return None;
    }
    let has = |f: &dyn Fn(LabTest) -> bool| shown.iter().any(|&i| f(o.labs[i].test));
    let mut parts: Vec<String> = Vec::new();
    // The outcomes module's sources, as cited there.
    let glycaemia = match (
        has(&|t| t == LabTest::FastingGlucose),
        has(&|t| t == LabTest::Hba1c),
    ) {
        (true, true) => Some("Glucose and HbA1c"),
        (true, false) => Some("Glucose"),
        (false, true) => Some("HbA1c"),
        (false, false) => None,
    };
    if let Some(tests) = glycaemia {
        parts.push(format!(
            "{tests} ranges follow the American Diabetes Association's Standards of Care."
        ));
    }
    if has(&|t| t == LabTest::Waist) {
        parts.push(
            "Waist ranges follow the World Health Organization's expert consultation on waist circumference (2008), for men and women separately; without a recorded sex a waist is only recorded."
                .into(),
        );
    }
    if has(&|t| matches!(t, LabTest::SystolicBp | LabTest::DiastolicBp)) {
        let (sys, dia) = cohortpress_metric_outcomes::SEVERE_BP_MMHG;
        parts.push(format!(
            "Blood pressure is recorded without a range here; a reading above {}/{} mmHg is flagged for a clinician (American College of Cardiology and American Heart Association guideline, 2017).",
            fmt::int(sys),
            fmt::int(dia)
        ));
    }
    if has(&|t| t == LabTest::Egfr) {
        parts.push(
            "eGFR categories (G1 to G5) follow the KDIGO 2012 guideline on chronic kidney disease."
                .into(),
        );
    }
    parts.push("A value in a range is not a diagnosis; your clinician interprets it.".into());
    Some(parts.join(" "))
}

/// Lab values with their ranges, when there are any (the latest ones: [`labs_shown`]).
fn labs(o: &OutcomesView) -> Option<TableView> {
    (!o.labs.is_empty()).then(|| TableView {
        header: vec![
            "Date".into(),
            "Test".into(),
            "Value".into(),
            "Also".into(),
            "Range".into(),
        ],
        rows: labs_shown(o)
            .into_iter()
            .map(|i| &o.labs[i])
            .map(|l| {
                // A censored value is the bound it is, printed as such (`> 14.0 %`), never as
                // the number alone.
                let q = l
                    .qualifier
                    .map_or(String::new(), |c| format!("{} ", c.symbol()));
                let value = format!("{q}{} {}", lab_number(l.test, l.value, &l.unit), l.unit);
                let alt = match (l.value_alt, l.unit_alt.as_deref()) {
                    (Some(v), Some(u)) => format!("{q}{} {u}", lab_number(l.test, v, u)),
                    _ => String::new(),
                };
                vec![
                    fmt::date(l.date),
                    l.test.label().to_string(),
                    value.trim().to_string(),
                    alt.trim().to_string(),
                    // An eGFR's class is KDIGO's words (`mildly decreased (G2)`), not its code.
                    if l.test == LabTest::Egfr {
                        l.category.label().to_string()
                    } else {
                        l.category.as_str().replace('_', " ")
                    },
                ]
            })
            .collect(),
    })
}

/// A lab value with the decimals its unit is usually written with, so a column never mixes
/// `5 %` and `5.1 %`: HbA1c in % and glucose in mmol/L to one decimal, mg/dL, mmol/mol and
/// mmHg and eGFR whole, lengths to one decimal (common practice in laboratory reports). A glucose or
/// HbA1c value is never rounded across the cut-off of the range printed beside it
/// ([`cohortpress_metric_outcomes::lab_shown`]: 6.45 % prints 6.4 beside "prediabetes range").
fn lab_number(test: LabTest, v: f64, unit: &str) -> String {
    let decimals = match unit {
        "mg/dL" | "mmol/mol" | "mmHg" | "mL/min/1.73 m²" => 0,
        _ => 1,
    };
    fmt::fixed(
        cohortpress_metric_outcomes::lab_shown(test, v, unit, decimals),
        decimals as usize,
    )
}

/// Flags of every module: clinical first, then notices, then information. A flag seen at
/// follow-up only (`left`: the day someone who stopped the program left it) is kept, and says
/// so: SG-001 of the sample program, who left on 15 Aug 2026, read "For review with a licensed
/// clinician: Current BMI is about 17.9 kg/m²…" from follow-up weigh-ins alone, as if it were
/// a finding of the program.
fn flags(results: &ModuleResults, left: Option<NaiveDate>) -> Vec<FlagView> {
    let mut flags: Vec<FlagView> = results
        .outputs
        .iter()
        .flat_map(|(m, o)| o.flags.iter().map(move |f| (m, f)))
        // The energy section already says why a person who left before the period has no
        // energy figures for it; the flag is the tidy metrics' reason.
        .filter(|(_, f)| f.code != "left_before_period")
        .map(|(m, f)| {
            let follow_up = results.at_follow_up(m, &f.code);
            let mut message = fmt::tidy_message(&f.message);
            if let Some(w) = left.filter(|_| follow_up) {
                message.push_str(&format!(
                    " This was seen at follow-up, after you left the program on {}.",
                    fmt::date(w)
                ));
            }
            FlagView {
                severity: match f.severity {
                    FlagSeverity::Clinical => "clinical",
                    FlagSeverity::Notice => "notice",
                    FlagSeverity::Info => "info",
                }
                .into(),
                clinical: f.severity == FlagSeverity::Clinical,
                message,
                follow_up,
            }
        })
        .collect();
    flags.sort_by_key(|f| match f.severity.as_str() {
        "clinical" => 0,
        "notice" => 1,
        _ => 2,
    });
    flags
}

/// The notice of a report whose weigh-ins are byte for byte another participant folder's. It
/// names no other folder (that would be another person's id in this one's report); the staff's
/// data-quality list and the log do. The figures are still shown: the team may find this
/// folder is the right one.
pub const COPY_NOTICE: &str = "The weigh-ins in this report are identical, entry for entry, to those in another participant's folder in this program. Either the same person's records are filed twice, or a folder was copied for a new participant and not emptied, so the weight figures below may not be yours. Until the program team has corrected it, this report is not counted in the group report. If these weigh-ins are not yours, please tell the program team.";

/// Data problems found in this participant's files, in plain words (a copy of another folder's
/// weigh-ins is the report's notice instead; rows dated after a withdrawal of consent are the
/// staff's to deal with, and nothing of them is shown).
fn data_notes(diags: &[Diagnostic]) -> Vec<String> {
    diags
        .iter()
        .filter(|d| {
            !crate::participant::is_copy_of_another(d)
                && !crate::participant::records::is_after_withdrawn_consent(d)
        })
        .map(|d| {
            let file = d.file.rsplit('/').next().unwrap_or(&d.file);
            let line = d.line.map(|l| format!(", line {l}")).unwrap_or_default();
            if d.severity == Severity::Error {
                // A whole file was left out: say what this report is missing.
                let missing = match file {
                    "weights.csv" => "weigh-ins",
                    "intake.csv" => "food log",
                    "activity.csv" => "activity log",
                    "sessions.csv" => "session attendance",
                    "labs.csv" => "lab results",
                    _ => "data",
                };
                format!(
                    "Not used — {file}{line}: {}. This report is without your {missing} from that file.",
                    d.message
                )
            } else {
                format!("Note — {file}{line}: {}", d.message)
            }
        })
        .collect()
}

/// The scalars and texts of modules other than the built-in ones (external modules), as
/// their outputs label them.
fn extra_modules(results: &ModuleResults) -> Vec<ExtraView> {
    results
        .outputs
        .iter()
        .filter(|(m, _)| !BUILTIN.contains(&m.as_str()))
        .map(|(m, o)| ExtraView {
            module: m.clone(),
            items: o
                .scalars
                .iter()
                .map(|s| {
                    Kv::new(
                        &s.label,
                        &s.value
                            .map(|v| format!("{} {}", fmt::fixed(v, 1), s.unit))
                            .unwrap_or_else(|| "–".into()),
                    )
                })
                .chain(
                    o.texts
                        .iter()
                        .map(|t| Kv::new(&t.name.replace('_', " "), &t.label)),
                )
                .collect(),
        })
        .collect()
}

/// The last four weeks' slope's 95 % range in the program's units, as the headline and the
/// summary print it (` (95 % range −0.25 to +0.05 kg/week)`), empty without a finite range.
fn slope_range(t: &TrendView, units: UnitSystem) -> String {
    match (t.slope_kg_per_week.lower, t.slope_kg_per_week.upper) {
        (Some(l), Some(u)) if l.is_finite() && u.is_finite() => format!(
            " (95 % range {} to {})",
            fmt::signed(fmt::weight_value(l, units), 2),
            fmt::rate_per_week(u, units)
        ),
        _ => String::new(),
    }
}

/// Whether the last four weeks' slope interval is wider than the whole plateau band (the
/// `trend` module's `plateau_band_percent_per_week` either side of zero, of the current trend
/// weight): the weigh-ins of those weeks alone could not tell a level weight from one moving at
/// the band's edge, so the rate is printed with its range. A rate pinned down closer than that
/// is printed alone.
fn slope_is_wide(t: &TrendView, band_percent_per_week: f64) -> bool {
    let (Some(l), Some(u), Some(w)) = (
        t.slope_kg_per_week.lower,
        t.slope_kg_per_week.upper,
        t.current_weight_kg.value,
    ) else {
        return false;
    };
    u - l > 2.0 * band_percent_per_week / 100.0 * w
}

/// Weigh-in days in the last four weeks below which a level trend is said to rest mostly on
/// the weeks before ([`headline`]; program choice: one a week).
const MIN_RECENT_WEIGH_IN_DAYS: usize = 4;

// Each argument is one fact about the person the opening sentence depends on; a struct of them
// would be built in one place and taken apart in the next.
#[allow(clippy::too_many_arguments)]
fn headline(
    trend: Option<&TrendView>,
    outcomes: Option<&OutcomesView>,
    units: UnitSystem,
    // The day they left, and whether later weigh-ins are read as follow-up (stopped the
    // program rather than withdrew consent).
    left: Option<(NaiveDate, bool)>,
    joined_recently: Option<NaiveDate>,
    weighs_in_enough: bool,
    // No weigh-in up to the period's end at all (a food and activity log only).
    no_weigh_in: bool,
    // Days with a weigh-in in the period's last 28 days.
    recent_weigh_in_days: usize,
) -> String {
    let status = trend.map_or(Status::InsufficientData, |t| t.status);
    let rate = trend.and_then(|t| t.slope_kg_per_week.value);
    // The same words as the summary's "Change since start".
    let since = change_words(trend, outcomes, units)
        .map(|c| format!(" Since you started: {c}."))
        .unwrap_or_default();
    let rate_s = rate
        .map(|r| fmt::rate_per_week(r, units))
        .unwrap_or_default();
    let rate_range = trend.map(|t| slope_range(t, units)).unwrap_or_default();
    // Someone who has left gets no "last four weeks" status: their records stop at leaving,
    // or, when they only stopped the program, their later weigh-ins are follow-up (counted in
    // the program's outcome figures) and nothing here is advice for the time since.
    match left {
        Some((w, false)) => {
            return format!(
                "You left the program on {}; this report shows your records up to then.{since}",
                fmt::date(w)
            );
        }
        Some((w, true)) => {
            return format!(
                "You left the program on {}. Weigh-ins after that day are follow-up only: they are included in your weight figures, and this report makes no suggestions for the time since you left.{since}",
                fmt::date(w)
            );
        }
        None => {}
    }
    // A rise from the lowest trend weight confirmed by level is named whatever the last four
    // weeks' slope says (a sparse weigher's regain is otherwise invisible here), and first: the
    // verdict with its evidence, then the last four weeks in words that do not call the same
    // weight a plateau ("edged up …, slowly enough to count as a plateau. Your trend weight is
    // now about 1.4 kg above its lowest point" read as two verdicts at odds).
    let regain = trend
        .filter(|_| status != Status::Regaining)
        .and_then(|t| guidance::regain_words(t, units));
    let lead = match status {
        Status::Plateau | Status::Stable if regain.is_some() => {
            if trend.is_some_and(guidance::still_rising) {
                format!("Over the last four weeks it has kept edging up ({rate_s}).")
            } else if trend.is_some_and(guidance::still_falling) {
                format!("Over the last four weeks it has edged down slowly ({rate_s}).")
            } else {
                "Over the last four weeks it has held about level.".to_string()
            }
        }
        // "Going down by" carries the sign already: "by about 1.32 kg/week", not "−1.32".
        Status::Losing => format!(
            "Your weight trend is going down, by about {} {}/week over the last four weeks.",
            fmt::fixed(fmt::weight_value(rate.unwrap_or(0.0), units).abs(), 2),
            fmt::weight_unit(units)
        ),
        // A plateau is a pace inside the plateau band, not necessarily none: a slope whose
        // whole interval is above zero is named as the slow rise it is, not "held steady"
        // (sample seed 7, SG-227: "held steady" above +0.19 kg/week, 95 % 0.02 to 0.35).
        Status::Plateau if trend.is_some_and(guidance::still_rising) => format!(
            "Your weight has edged up over the last four weeks ({rate_s}), slowly enough to count as a plateau."
        ),
        // And a slope whose whole interval is below zero is the slow fall it is: a man of
        // 197 kg read "held steady" beside "Recent rate −0.39 kg/week" (the band is 0.25 % of
        // body weight a week, 0.49 kg at his weight).
        Status::Plateau if trend.is_some_and(guidance::still_falling) => format!(
            "Your weight has edged down over the last four weeks ({rate_s}), slowly enough to count as a plateau."
        ),
        Status::Plateau => {
            "Your weight has held steady over the last four weeks (a plateau).".to_string()
        }
        Status::Stable if trend.is_some_and(guidance::still_rising) => format!(
            "Your weight has been nearly stable over the last four weeks, edging up slowly ({rate_s})."
        ),
        Status::Stable if trend.is_some_and(guidance::still_falling) => format!(
            "Your weight has been nearly stable over the last four weeks, edging down slowly ({rate_s})."
        ),
        Status::Regaining => {
            format!("Your weight trend has been rising over the last four weeks ({rate_s}).")
        }
        Status::Stable => "Your weight has been stable over the last four weeks.".to_string(),
        // Someone who weighs in as often as asked read "more regular weigh-ins would show
        // whether it has levelled off" (4.4 a week against a target of 3, losing 0.15 kg a
        // week): a slow change near the plateau band's edge needs more weeks, not more
        // weigh-ins.
        // `unclear` is a pace the weigh-ins do not pin down against the plateau band: inside it
        // with an interval past its edge, or beyond it with an interval past zero (a pace of
        // −0.45 kg/week, 95 % −1.0 to +0.1, read "changed little"). A range wholly on one side
        // of zero is a slow fall or rise near the band's edge (demo program, SG-070: −0.27
        // kg/week, 95 % −0.29 to −0.24, at a band of 0.27, is no "too uncertain"); one across
        // zero leaves the direction open.
        Status::Unclear => {
            let next = if weighs_in_enough {
                "the next weeks' weigh-ins will show"
            } else {
                "more regular weigh-ins would show"
            };
            if trend.is_some_and(guidance::still_falling) {
                format!(
                    "Your weight has come down slowly over the last four weeks, at about {rate_s}{rate_range}, near the pace the program counts as levelling off; {next} whether it is levelling off."
                )
            } else if trend.is_some_and(guidance::still_rising) {
                format!(
                    "Your weight has edged up slowly over the last four weeks, at about {rate_s}{rate_range}, near the pace the program counts as holding steady; {next} whether it is still rising."
                )
            } else {
                format!(
                    "Your weigh-ins of the last four weeks put your weight's pace at about {rate_s}{rate_range}, too uncertain yet to tell whether it is going down, holding steady or going up; {next} which."
                )
            }
        }
        Status::InsufficientData => match joined_recently {
            // Not a shortfall of theirs: the weeks have not passed yet.
            Some(e) => format!(
                "You joined on {}, so it is too early to see which way your weight is moving; a few more weeks of weigh-ins will show it.",
                fmt::date(e)
            ),
            // No weigh-in at all (a food and activity log only): "too few recent
            // weigh-ins" read as if some had been made.
            None if no_weigh_in => {
                "No weigh-in is recorded yet, so this report cannot show where your weight stands or how it is moving.".to_string()
            }
            // "Too few … to see how your weight moved" stood above a fast-loss flag giving
            // "about 1.2 kg a week" and an implied intake from the same weeks (a weekly
            // weigher, clinical27): the weigh-ins do show something, only not enough for the
            // verdicts (plateau, loss, regain) this sentence gives everyone else.
            None => "There are too few recent weigh-ins for a firm reading of how your weight moved over the last four weeks.".to_string(),
        },
    };
    // A plateau the whole record shows still going at the last weigh-in (the `trend` module's
    // `plateau_onset`, the day the trend entered the plateau band, confirmed by what followed)
    // is shaded on the chart; where the last four weeks alone give no verdict it was named
    // nowhere else, and the chart's shading stood beside "weigh-ins will show whether it is
    // levelling off" (a pounds demo, SG-008) or "too few recent weigh-ins" (demo seed 11,
    // SG-027: level from 5 June to a last weigh-in on 30 August, a month before the period's
    // end). Said as what the record shows, dated, and for a stale record up to when.
    let lead = match (status, trend.and_then(|t| t.plateau_onset)) {
        (Status::Unclear, Some(onset)) => format!(
            "{lead} Read over your whole record, your trend has stayed within the pace the program counts as a plateau since {}.",
            fmt::date(onset)
        ),
        (Status::InsufficientData, Some(onset)) if joined_recently.is_none() && !no_weigh_in => {
            match trend.and_then(|t| t.weigh_ins.points.last()) {
                Some(last) => format!(
                    "{lead} Up to your last weigh-in on {}, your trend had stayed within the pace the program counts as a plateau since {}.",
                    fmt::date(last.date),
                    fmt::date(onset)
                ),
                None => lead,
            }
        }
        _ => lead,
    };
    // A level or slowly moving trend read from fewer weigh-ins than one a week in the last four
    // weeks rests mostly on the weeks before (the trend carries them forward): "held steady
    // over the last four weeks" stood on one clinic weigh-in (a trial participant, May 2026).
    // Program choice: one a week.
    let lead = if matches!(status, Status::Plateau | Status::Stable)
        && recent_weigh_in_days < MIN_RECENT_WEIGH_IN_DAYS
    {
        let n = match recent_weigh_in_days {
            0 => "no weigh-in".to_string(),
            1 => "one weigh-in".to_string(),
            k => format!("{k} weigh-ins"),
        };
        format!("{lead} With {n} in the last four weeks, this rests mostly on the weeks before.")
    } else {
        lead
    };
    match regain {
        Some(w) => format!(
            "Your weight has come back up from its lowest point: your trend weight is now {w}. {lead}{since}"
        ),
        None => format!("{lead}{since}"),
    }
}

/// The numbers behind a plateau reading, in plain words and the program's display units (the
/// module's own `evidence` text, in kg and model terms, stays in the tidy tables).
fn plateau_evidence(r: &PlateauRow, units: UnitSystem) -> String {
    let mut parts = Vec::new();
    if let (Some(before), Some(during)) = (
        r.implied_intake_before_kcal_per_day,
        r.implied_intake_during_kcal_per_day,
    ) {
        parts.push(format!(
            "Your weight trend implies about {} a day early in the program and about {} a day during the plateau.",
            fmt::kcal(before),
            fmt::kcal(during)
        ));
    }
    // The energy module's expected slope is at the intake the trend implied early in the
    // program (days 7–34), not at the logged intake: "With the intake you logged, the model
    // expects …" stood in nine of the sample's September reports (SG-003, SG-004, …).
    if let (Some(expected), Some(observed)) =
        (r.expected_slope_kg_per_week, r.observed_slope_kg_per_week)
    {
        parts.push(format!(
            "Eating as in those early weeks, the model expects a change of {} at your weight when the plateau began; the trend shows {}.",
            fmt::rate_per_week(expected, units),
            fmt::rate_per_week(observed, units)
        ));
    }
    parts.join(" ")
}

/// Person-first words for a WHO BMI range (the standard labels stay in the tidy metrics and
/// group tables): ` — your BMI is in the range the WHO calls …`.
fn bmi_range_words(category: Option<BmiCategory>) -> String {
    // WHO 2000, Technical Report Series 894: cut-offs 18.5, 25, 30, 35, 40.
    let (name, range) = match category {
        Some(BmiCategory::Underweight) => ("underweight", "below 18.5"),
        Some(BmiCategory::Normal) => ("normal weight", "18.5 to 24.9"),
        Some(BmiCategory::Overweight) => ("pre-obese (overweight)", "25 to 29.9"),
        Some(BmiCategory::ObesityClass1) => ("obesity class I", "30 to 34.9"),
        Some(BmiCategory::ObesityClass2) => ("obesity class II", "35 to 39.9"),
        Some(BmiCategory::ObesityClass3) => ("obesity class III", "40 or more"),
        None => return String::new(),
    };
    format!("; your BMI is in the range {range}, which the WHO calls “{name}”")
}

/// The day a week starting on `monday` is named by: its first day from `first_day` on (the
/// week `first_day` falls in starts on it), else its Monday.
fn week_named_from(monday: NaiveDate, first_day: NaiveDate) -> NaiveDate {
    if monday < first_day && first_day < monday + chrono::Duration::days(7) {
        first_day
    } else {
        monday
    }
}

/// Widest 95 % band of the weight trend a report shows, as a share of the trend weight either
/// side: 5 % of body weight is the change weight programs count as clinically meaningful
/// (common practice; the default target here). A band wider than that says nothing about
/// which way the weight went, and its ends are weights a body cannot reach between weigh-ins
/// (the trend of clinic weigh-ins 28 days apart, about 100 kg, had a band of 67.6–130.9 kg
/// before the trend module's slope prior was mended; the guard stays for any band that slips).
const TREND_BAND_MAX_HALF_WIDTH: f64 = 0.05;

/// The trend's 95 % band on a day as a report shows it, in kg, or `None` where it is left out:
/// wider than `TREND_BAND_MAX_HALF_WIDTH` either side, not finite, not around its point, or of
/// no width at all (a trend is never known exactly). A guard on what leaves the
/// estimator; the tidy metrics keep the band as the trend module gives it.
fn shown_trend_band(value: f64, lower: Option<f64>, upper: Option<f64>) -> Option<(f64, f64)> {
    let (l, u) = (lower?, upper?);
    let ok = [value, l, u].iter().all(|x| x.is_finite())
        && l <= value
        && value <= u
        && u - l > 1e-6
        && (u - l) / 2.0 <= TREND_BAND_MAX_HALF_WIDTH * value;
    ok.then_some((l, u))
}

fn weight_chart(
    v: &BuiltinViews,
    target_kg: Option<f64>,
    units: UnitSystem,
    plan: &Scope<'_>,
    enrolled: NaiveDate,
    left_follow_up: Option<NaiveDate>,
    to: NaiveDate,
) -> (Chart, ChartView) {
    let conv = |kg: f64| fmt::weight_value(kg, units);
    let unit = fmt::weight_unit(units);
    let mut lines = Vec::new();
    let mut bands = Vec::new();
    let mut spans = Vec::new();
    let mut table = TableView {
        header: vec![
            "Week ending".into(),
            format!("Trend ({unit})"),
            format!("95 % band ({unit})"),
        ],
        rows: Vec::new(),
    };
    // With fewer weigh-in days than a trend needs the trend series is empty: its legend
    // entries and the words for it described a line the chart did not draw.
    let has_trend = v
        .trend
        .as_ref()
        .is_some_and(|t| !t.weight_trend.points.is_empty());
    // Whether the band is left out on some day (see `shown_trend_band`): the description says so.
    let mut band_left_out = false;
    // Whether a row of the table is a week of fewer than 7 days: the description says so.
    let mut partial_weeks = false;
    if let Some(t) = &v.trend {
        // Dots of one day that print alike (to 0.1 of the unit, the resolution a scale shows
        // and well under a dot's size at any chart height) are drawn once: a scale's raw log
        // of thousands of readings a day made a 9 MB HTML page of dots on top of each other.
        let mut seen = std::collections::HashSet::new();
        lines.push(LineSeries {
            label: "Weigh-ins".into(),
            points: t
                .weigh_ins
                .points
                .iter()
                .map(|p| (p.date, conv(p.value)))
                .filter(|&(d, y)| seen.insert((d, (y * 10.0).round() as i64)))
                .collect(),
            style: LineStyle::Dots,
        });
        let s = &t.weight_trend;
        if has_trend {
            // A day whose band is not shown is a break in it (non-finite bounds), never bridged.
            bands.push(BandSeries {
                label: "Trend 95 % band".into(),
                points: s
                    .points
                    .iter()
                    .filter(|p| p.lower.is_some() && p.upper.is_some())
                    .map(|p| match shown_trend_band(p.value, p.lower, p.upper) {
                        Some((l, u)) => (p.date, conv(l), conv(u)),
                        None => (p.date, f64::NAN, f64::NAN),
                    })
                    .collect(),
            });
            lines.push(LineSeries {
                label: "Trend".into(),
                points: s.points.iter().map(|p| (p.date, conv(p.value))).collect(),
                style: LineStyle::Solid,
            });
        }
        // One row per Monday-to-Sunday week: the trend on the week's last day in the series,
        // the Sunday or the last weigh-in's day, as `weight_trend_weekly` in weekly.csv. A week
        // the series covers in part gives its days, as the habits table does: the last row of
        // someone who left on a Saturday read "Week ending 1 Aug 2026" below weeks ending on
        // Sundays, for a week of six days.
        let n = s.points.len();
        let first_day = s.points.first().map(|p| p.date);
        for (i, p) in s.points.iter().enumerate() {
            if i + 1 == n || p.date.weekday() == chrono::Weekday::Sun {
                let monday = p.date
                    - chrono::Duration::days(i64::from(p.date.weekday().num_days_from_monday()));
                let from = first_day.map_or(monday, |f| f.max(monday));
                let days = (p.date - from).num_days() + 1;
                let week = if (1..7).contains(&days) {
                    partial_weeks = true;
                    format!(
                        "{} ({days} {})",
                        fmt::date(p.date),
                        if days == 1 { "day" } else { "days" }
                    )
                } else {
                    fmt::date(p.date)
                };
                table.rows.push(vec![
                    week,
                    fmt::fixed(conv(p.value), 1),
                    match (p.lower, p.upper) {
                        (Some(_), Some(_)) => match shown_trend_band(p.value, p.lower, p.upper) {
                            Some((l, u)) => {
                                format!("{}–{}", fmt::fixed(conv(l), 1), fmt::fixed(conv(u), 1))
                            }
                            None => {
                                band_left_out = true;
                                "–".into()
                            }
                        },
                        _ => String::new(),
                    },
                ]);
            }
        }
        for r in &t.periods {
            let (kind, label) = match r.kind {
                PeriodKind::Plateau => (SpanKind::Plateau, "Plateau"),
                PeriodKind::Regain => (SpanKind::Regain, "Regain"),
                PeriodKind::Loss | PeriodKind::InsufficientData => continue,
            };
            spans.push(Span {
                label: label.into(),
                from: r.start,
                to: r.end,
                kind,
            });
        }
    }
    // No forecast (e.g. after leaving the program): no empty "Forecast" entry in the legend.
    let mut forecast_to = None;
    if let Some(s) = v
        .energy
        .as_ref()
        .map(|e| &e.forecast_weight)
        .filter(|s| !s.points.is_empty())
    {
        bands.push(BandSeries {
            label: "Forecast band".into(),
            points: s
                .points
                .iter()
                .filter_map(|p| Some((p.date, conv(p.lower?), conv(p.upper?))))
                .collect(),
        });
        lines.push(LineSeries {
            label: "Forecast".into(),
            points: s.points.iter().map(|p| (p.date, conv(p.value))).collect(),
            style: LineStyle::Dashed,
        });
        forecast_to = s.points.last().map(|p| p.date);
    }
    let mut hlines = Vec::new();
    if let Some(t) = target_kg {
        hlines.push(HLine {
            label: format!("Target {}", fmt::weight(t, units)),
            y: conv(t),
        });
    }
    let mut alt = weight_chart_alt(
        plan.program.info.start,
        enrolled,
        to,
        !spans.is_empty(),
        target_kg.is_some(),
        forecast_to,
    );
    if !has_trend {
        // No weigh-in at all: "too few yet" stood above "No data for this period".
        let none = v
            .trend
            .as_ref()
            .is_some_and(|t| t.weigh_ins.points.is_empty());
        alt = alt.replacen(
            "weigh-ins, the smoothed trend with its 95 % band",
            if none {
                "no weigh-in recorded yet"
            } else {
                "weigh-ins (too few yet for a smoothed trend)"
            },
            1,
        );
    }
    // Steps the trend left out: the dots before each sit off the line by the steps after them
    // (with a scale put back, those before the first step sit on it); say where and why.
    if let Some(t) = v.trend.as_ref().filter(|t| !t.weigh_in_steps.is_empty()) {
        let steps = &t.weigh_in_steps;
        let mut spans = Vec::new();
        for (k, s) in steps.iter().enumerate() {
            let shift = cohortpress_metric_trend::view::step_shift_after(steps, s.before);
            // Less than half a kilogram is within the day-to-day scatter of the dots (program
            // choice): steps that cancel, measured a little apart, are not named.
            if shift.abs() < 0.5 {
                continue;
            }
            let side = if shift < 0.0 { "above" } else { "below" };
            let off = format!("{} {side} the trend line", fmt::weight(shift.abs(), units));
            spans.push(match k.checked_sub(1).map(|p| steps[p].after) {
                None => format!("up to {} sit {off}", fmt::date(s.before)),
                Some(from) => format!(
                    "from {} to {} sit {off}",
                    fmt::date(from),
                    fmt::date(s.before)
                ),
            });
        }
        if !spans.is_empty() {
            alt.push_str(&format!(
                " The weigh-ins {}: it counts them on the level of the later weigh-ins (see the \
                 points to note).",
                spans.join(", and those ")
            ));
        }
    }
    if has_trend && let Some(t) = v.trend.as_ref() {
        band_left_out |=
            t.weight_trend.points.iter().any(|p| {
                p.lower.is_some() && shown_trend_band(p.value, p.lower, p.upper).is_none()
            });
    }
    if band_left_out {
        alt.push_str(
            " Where the weigh-ins are too few or too far apart to narrow the trend to within \
             5 % of your weight either way, the band is left out (a dash in the table).",
        );
    }
    if partial_weeks {
        alt.push_str(
            " In the table, a week the trend covers only in part (the first, from your first \
             weigh-in; the last, to your last weigh-in) gives its number of days beside the \
             day it ends.",
        );
    }
    if let Some(t) = v.trend.as_ref() {
        alt.push_str(&source_offsets_words(&t.source_offsets, units));
    }
    let vlines: Vec<VLine> = left_follow_up
        .map(|w| VLine {
            // The date is in the description: with it the legend entry was cut short in the
            // narrow drawing ("Left the program, 27 Jul 2…").
            label: "Left the program".into(),
            tag: "left the program".into(),
            date: w,
        })
        .into_iter()
        .collect();
    if let Some(w) = left_follow_up {
        alt.push_str(&format!(
            " A vertical line marks {}, the day you left the program; weigh-ins after it are follow-up.",
            fmt::date(w)
        ));
    }
    let chart = Chart::Line(LineChart {
        title: "Weight".into(),
        y_label: unit.into(),
        lines,
        bands,
        spans,
        hlines,
        vlines,
        alt_text: alt.clone(),
        // The days the description names: from the program's start or enrolment to the
        // period's end (or the day they left). A last weigh-in months before it showed as an
        // axis ending in April under "Weight chart for 1 Apr 2026 to 30 Sep 2026".
        x_span: Some((plan.program.info.start.max(enrolled), to)),
    });
    (
        chart,
        ChartView {
            title: "Weight and trend".into(),
            alt,
            table,
        },
    )
}

/// Said in the energy section of someone whose sex is not recorded (`sex: unrecorded`): the
/// energy module takes the mean of the equations' female and male forms and widens the ranges
/// by their difference.
const SEX_NOT_RECORDED_WORDS: &str = " Your sex is not recorded, so resting energy is the mean of the equation's female and male forms, and the ranges allow for the difference between them.";

/// Less than this between a weigh-in source and the home scale, kg, is within the day-to-day
/// scatter of the dots (program choice, as for the steps named in the chart's description).
const NAMED_SOURCE_OFFSET_KG: f64 = 0.5;

/// What the chart's description says of the weigh-in sources whose offset from the home scale
/// the trend takes off (clinic weigh-ins in clothes, another scale). The chart draws every
/// weigh-in as read, so such dots sit off the trend line by the offset; without a word they read
/// as a trend drawn too low (sample program, September 2026: the clinic dots of 34 of 50
/// participants 0.5–1.1 kg above the line, unexplained). Empty when no offset reaches
/// [`NAMED_SOURCE_OFFSET_KG`].
fn source_offsets_words(
    offsets: &[cohortpress_metric_trend::view::SourceOffsetRow],
    units: UnitSystem,
) -> String {
    let named: Vec<String> = offsets
        .iter()
        .filter_map(|o| {
            let kg = o.offset_kg.filter(|k| k.abs() >= NAMED_SOURCE_OFFSET_KG)?;
            let side = if kg > 0.0 { "above" } else { "below" };
            let mut name: String = o.source.chars().take(40).collect();
            if name.len() < o.source.len() {
                name.push('…');
            }
            Some(format!(
                "weigh-ins marked “{name}” read {} {side} your home scale",
                fmt::weight(kg.abs(), units)
            ))
        })
        .collect();
    if named.is_empty() {
        return String::new();
    }
    let mut list = named.join(", and ");
    list[..1].make_ascii_uppercase();
    format!(
        " {list} on average (clothing, another scale): the trend takes that off, so their dots sit about that far off the trend line."
    )
}

/// The weight chart's description. It starts where the person's records do: the program's
/// start, or their enrolment when they joined later (the chart's axis starts there too). A
/// forecast runs past the period's end (sample program, September 2026: an axis to 9 December
/// under "Weight chart for 1 Apr 2026 to 30 Sep 2026", the dashed line and its band unnamed):
/// the description says how far and on what assumption.
fn weight_chart_alt(
    start: NaiveDate,
    enrolled: NaiveDate,
    to: NaiveDate,
    spans: bool,
    target: bool,
    forecast_to: Option<NaiveDate>,
) -> String {
    let mut parts = vec!["weigh-ins, the smoothed trend with its 95 % band".to_string()];
    if spans {
        parts.push("plateau and regain periods shaded".into());
    }
    if target {
        parts.push("the target weight".into());
    }
    if let Some(f) = forecast_to.filter(|f| *f > to) {
        parts.push(format!(
            "a forecast to {} (dashed) if you keep eating as in the last weeks, with the range \
             it may fall in",
            fmt::date(f)
        ));
    }
    let last = parts.pop().expect("the first part");
    let list = if parts.is_empty() {
        last
    } else {
        format!("{}, and {last}", parts.join(", "))
    };
    format!(
        "Weight chart for {} to {}: {list}.",
        fmt::date(start.max(enrolled)),
        fmt::date(to),
    )
}

/// The energy section's resting energy: at one weight, the current one (the other figures cover
/// the energy module's window).
const RESTING_LABEL: &str = "Resting energy (estimated, at your current weight)";

/// The same for someone who left before the period began, or whose last weigh-in is four weeks
/// or more before its end: at the weight they last had.
const RESTING_LABEL_LEFT: &str = "Resting energy (estimated, at your last weight)";

/// The days the energy module's window covers, in words: `last 4 weeks`, `last 30 days`, or,
/// for someone enrolled fewer than `window_days` days before the period's end (the module's
/// window starts at enrolment then), `11 days since you enrolled`.
fn energy_window_words(window_days: u64, enrolled: NaiveDate, to: NaiveDate) -> String {
    let from = to - chrono::Duration::days(window_days as i64 - 1);
    if enrolled > from {
        let days = (to - enrolled).num_days() + 1;
        return format!("{} since you enrolled", day_count(days));
    }
    if window_days.is_multiple_of(7) {
        let w = window_days / 7;
        if w == 1 {
            "last week".to_string()
        } else {
            format!("last {w} weeks")
        }
    } else {
        format!("last {window_days} days")
    }
}

/// `1 day`, `11 days`.
fn day_count(days: i64) -> String {
    if days == 1 {
        "1 day".to_string()
    } else {
        format!("{days} days")
    }
}

/// The energy section. Its total energy use and the weekly table's energy use are two
/// estimates over different days: the total covers the energy module's last `window_days` and,
/// when the weight trend gives an implied intake, is measured by energy balance (implied intake
/// minus the energy stored); the weeks use the resting-energy equation × the person's activity
/// level + that week's logged activity. Both say which they are, so a reader comparing the
/// summary with the last weeks knows why they differ.
///
/// Someone who left before the period began (`left_before`) has no records in it: the period's
/// activity, energy use and intake would describe the days after they left (sample program,
/// September 2026, SG-018, left 27 July: "Activity, beyond resting 0 kcal/day", "Total energy
/// use per day (equation and activity, this period) 2,939 kcal/day"), so only the resting
/// energy and the weeks up to the day they left are shown.
fn energy_section(
    e: &EnergyResults,
    span: &str,
    left_before: Option<NaiveDate>,
    no_activity_log: bool,
) -> (EnergyView, Option<Chart>) {
    let mut items = Vec::new();
    let push = |items: &mut Vec<Kv>, label: &str, s: Interval| {
        if let Some(v) = s.value {
            let mut text = fmt::kcal_per_day(v);
            if let (Some(l), Some(u)) = (s.lower, s.upper) {
                text = format!("{text} (95 % interval {}–{})", fmt::int(l), fmt::int(u));
            }
            items.push(Kv::new(label, &text));
        }
    };
    // Every figure beside the implied intake covers its window (`span`), and its label says
    // so: the activity was the period's mean (a monthly report's 30 days, the whole program's
    // 180) beside intakes of the last 28. Resting energy is a figure at one weight, the
    // current one.
    push(&mut items, RESTING_LABEL, e.rmr_kcal_per_day);
    let activity_label = format!("Activity, beyond resting (average, {span})");
    if no_activity_log && e.activity_net_kcal_per_day.value.is_some() {
        items.push(Kv::new(&activity_label, "none logged"));
    } else {
        push(&mut items, &activity_label, e.activity_net_kcal_per_day);
    }
    // By energy balance exactly when there is an implied intake (the energy module's rule).
    let by_balance = e.implied_intake_kcal_per_day.value.is_some();
    let tdee_label = if by_balance {
        format!("Total energy use per day ({span}, from your weight trend)")
    } else {
        format!("Total energy use per day (equation and activity, {span})")
    };
    // The rest of the total: everyday movement that is not logged activity, and digesting food
    // (resting × (activity level − 1) when the total is the equation's). Without it, "Resting
    // energy 1,241" and "Activity, beyond resting 49" stood above a total of 2,020 that they did
    // not add up to (sample program, September 2026, SG-017). Computed from the printed figures,
    // so the lines add up as printed; left out when the total from the weight trend is below
    // the other two (nothing honest to show as "the rest").
    let printed = |s: Interval| s.value.map(f64::round);
    let everyday = match (
        printed(e.tdee_kcal_per_day),
        printed(e.rmr_kcal_per_day),
        printed(e.activity_net_kcal_per_day).or(Some(0.0)),
    ) {
        (Some(t), Some(r), Some(a)) if t - r - a >= 0.0 => Some(t - r - a),
        _ => None,
    };
    if let Some(rest) = everyday {
        items.push(Kv::new(
            &format!("Everyday movement and digestion ({span})"),
            &fmt::kcal_per_day(rest),
        ));
    }
    push(&mut items, &tdee_label, e.tdee_kcal_per_day);
    push(
        &mut items,
        &format!("Intake you logged (average, {span})"),
        e.logged_intake_kcal_per_day,
    );
    push(
        &mut items,
        &format!("Intake implied by your weight trend ({span})"),
        e.implied_intake_kcal_per_day,
    );
    // A difference is shown as the difference of the two figures printed above it, so the three
    // add up (as the change since the start does): "+899" beside 3,268 and 2,370 read as an
    // error (logged 2,369.5). The tidy metrics keep the unrounded difference.
    let printed_difference = |d: Option<f64>, a: Option<f64>, b: Option<f64>| match (a, b) {
        (Some(a), Some(b)) => d.map(|_| a.round() - b.round()),
        _ => d,
    };
    let implied = e.implied_intake_kcal_per_day.value;
    if let Some(g) = printed_difference(
        e.intake_gap_kcal_per_day.value,
        implied,
        e.logged_intake_kcal_per_day.value,
    ) {
        items.push(Kv::new(
            &format!("Implied intake minus logged intake ({span})"),
            &fmt::kcal_change(g),
        ));
    }
    if let Some(b) = printed_difference(
        e.energy_balance_kcal_per_day.value,
        implied,
        e.tdee_kcal_per_day.value,
    ) {
        items.push(Kv::new(
            &format!("Energy balance (implied, {span})"),
            &fmt::kcal_change(b),
        ));
    }
    items.push(Kv::new("Resting-energy equation", e.rmr_equation.label()));
    // No weight to estimate energy use from (no weigh-in yet): the words below spoke of "the
    // total above" over the equation's name alone.
    let no_energy_use = e.tdee_kcal_per_day.value.is_none()
        && !e
            .weekly_energy
            .iter()
            .any(|r| r.expenditure_kcal_per_day.is_some());
    let how_total = if no_energy_use && e.rmr_kcal_per_day.value.is_none() {
        "Energy use is estimated from your weight, and there is no weigh-in recorded yet, so no energy figure can be given this month.".to_string()
    } else if by_balance {
        format!(
            "The total energy use above is measured over the {span} from your weight trend: the intake it implies minus the energy your weight change stored or released. The week-by-week energy use below is estimated from a published equation, your activity level and the activity you logged that week (net of what you would burn resting), so the two can differ."
        )
    } else {
        format!(
            "Energy use is estimated from a published equation, your activity level and your logged activity (net of what you would burn resting); the total above covers the {span}, the table below each week."
        )
    };
    // "Energy balance (implied) +59 kcal/day" stood unexplained (sample program, September
    // 2026, SG-001): say what it is and which way its sign points.
    let balance = if e.energy_balance_kcal_per_day.value.is_some() {
        " The energy balance is the implied intake minus the total energy use: above zero your body stored energy (weight goes up), below zero it drew on its reserves (weight goes down)."
    } else {
        ""
    };
    let rest = if everyday.is_some() {
        " Everyday movement and digestion is the rest of the total: moving about in daily life beyond the activity you logged, and digesting food."
    } else {
        ""
    };
    // Said only where an implied intake is shown, above or in a week of the table: with too
    // few weigh-ins for a trend the words explained a figure the report did not have.
    let implied_words = if implied.is_some()
        || e.weekly_energy
            .iter()
            .any(|r| r.implied_intake_kcal_per_day.is_some())
    {
        " The intake implied by your weight trend comes from a published model of how body weight responds to energy balance; it often differs from logged intake, because logging everything is hard."
    } else {
        ""
    };
    let ranges = if no_energy_use && e.rmr_kcal_per_day.value.is_none() {
        ""
    } else {
        " Ranges are 95 % intervals."
    };
    let mut explanation = format!("{how_total}{rest}{implied_words}{balance}{ranges}");
    if let Some(left) = left_before {
        items.retain(|k| k.label == RESTING_LABEL || k.label == "Resting-energy equation");
        // Their weight now is not known: the figure is at the last one, as the words below and
        // "Where you stand" ("Weight at your last weigh-in") say.
        for k in items.iter_mut().filter(|k| k.label == RESTING_LABEL) {
            k.label = RESTING_LABEL_LEFT.into();
        }
        explanation = format!(
            "You left the program on {}, before this period began, so this period's activity, energy use and intake are not shown: they would describe the days after you left. Resting energy is estimated from a published equation at your last weight; the table below shows your weeks up to the day you left.",
            fmt::date(left)
        );
    }
    let mut table = TableView {
        header: vec![
            "Week of".into(),
            "Energy use, estimated (kcal/day)".into(),
            "Logged intake".into(),
            "Implied intake".into(),
        ],
        rows: Vec::new(),
    };
    let mut series: [Vec<(NaiveDate, f64)>; 3] = Default::default();
    for r in &e.weekly_energy {
        let d = r.week_start;
        let vals = [
            r.expenditure_kcal_per_day,
            r.logged_intake_kcal_per_day,
            r.implied_intake_kcal_per_day,
        ];
        for (i, v) in vals.iter().enumerate() {
            if let Some(v) = v {
                series[i].push((d, *v));
            }
        }
        let mut row = vec![fmt::date(d)];
        row.extend(
            vals.iter()
                .map(|v| v.map(fmt::int).unwrap_or_else(|| "–".into())),
        );
        table.rows.push(row);
    }
    // A column with no figure in any week is left out: someone without a food log had a
    // "Logged intake" column of dashes in every row (tryout, two April weigh-ins, no log).
    let keep: Vec<bool> = std::iter::once(true)
        .chain(series.iter().map(|s| !s.is_empty()))
        .collect();
    if keep.iter().skip(1).any(|k| *k) {
        let pick = |v: Vec<String>| -> Vec<String> {
            v.into_iter()
                .zip(&keep)
                .filter(|(_, k)| **k)
                .map(|(c, _)| c)
                .collect()
        };
        table.rows = std::mem::take(&mut table.rows)
            .into_iter()
            .map(pick)
            .collect();
        table.header = pick(std::mem::take(&mut table.header));
    }
    let [exp, logged, implied] = series;
    // The description names the series drawn, as the legend does (no food log: no logged
    // intake, and both said there was).
    let named = |words: [&str; 3]| {
        let parts: Vec<&str> = [&exp, &logged, &implied]
            .iter()
            .zip(words)
            .filter(|(s, _)| !s.is_empty())
            .map(|(_, w)| w)
            .collect();
        match parts.as_slice() {
            [] => "no figure yet".to_string(),
            [one] => one.to_string(),
            [rest @ .., last] => format!("{} and {last}", rest.join(", ")),
        }
    };
    let alt = format!(
        "Weekly energy: {}, in kcal per day.",
        named([
            "estimated energy use",
            "logged intake",
            "the intake implied by the weight trend"
        ])
    );
    let view_alt = if exp.is_empty() && logged.is_empty() && implied.is_empty() {
        "Weekly energy: no figure yet.".to_string()
    } else {
        format!(
            "Weekly {} (kcal/day).",
            named(["energy use", "logged intake", "implied intake"])
        )
    };
    let chart = Some(Chart::Line(LineChart {
        title: "Energy per day, by week".into(),
        y_label: "kcal/day".into(),
        lines: vec![
            LineSeries {
                label: "Energy use".into(),
                points: exp,
                style: LineStyle::Solid,
            },
            LineSeries {
                label: "Logged intake".into(),
                points: logged,
                style: LineStyle::Dots,
            },
            LineSeries {
                label: "Implied intake".into(),
                points: implied,
                style: LineStyle::Dashed,
            },
        ],
        bands: vec![],
        spans: vec![],
        hlines: vec![],
        vlines: vec![],
        alt_text: alt,
        x_span: None,
    }));
    let view = EnergyView {
        items,
        explanation,
        chart: ChartView {
            title: "Energy by week".into(),
            alt: view_alt,
            table,
        },
    };
    (view, chart)
}

/// Said under the weekly energy table when a week within the weight trend's span has no implied
/// intake: the energy module withholds a week whose trend fell faster than a very-low-calorie
/// diet or rose faster than food can supply (docs/METHODS.md §4). Sample program, September
/// 2026, SG-050: the dashed line stopped at 1,004 kcal in the week of 7 Sep and the last three
/// weeks read "–", unexplained, as her loss grew fastest. A week outside the trend's span (after
/// the last weigh-in) has no trend to read, and needs no word.
fn implied_gap_note(
    weeks: &[cohortpress_metric_energy::view::WeekEnergyRow],
    trend_span: Option<(NaiveDate, NaiveDate)>,
) -> Option<&'static str> {
    let (first, last) = trend_span?;
    // No week with one at all is no withheld week: in pregnancy the module reads no intake
    // from the trend (`not_modelled`), and the note blamed a fast fall or rise.
    if weeks
        .iter()
        .all(|r| r.implied_intake_kcal_per_day.is_none())
    {
        return None;
    }
    weeks
        .iter()
        .any(|r| {
            r.implied_intake_kcal_per_day.is_none()
                && r.week_start <= last
                && r.week_start + chrono::Duration::days(6) >= first
        })
        .then_some(
            " A dash under implied intake, and a gap in its line, is a week whose weight change is not read as eating: the weight fell faster than even a very low intake explains, or rose faster than food can (fluid, a step in the weigh-ins, or a very low intake to review with a clinician).",
        )
}

/// What could not be read of the activity log: `None` when everything was; otherwise how
/// many rows were dropped, or that the whole file was not used.
#[derive(Debug, Clone, PartialEq)]
enum ActivityUnread {
    Nothing,
    Rows(u64),
    File,
    /// No activity recorded at all since enrolment (no activity.csv, or no rows in it): the
    /// module counts that as 0 minutes, which the report does not print as if it were measured.
    NoLog,
}

fn activity_unread(diags: &[Diagnostic]) -> ActivityUnread {
    let mut rows = 0;
    for d in diags.iter().filter(|d| d.file.ends_with("/activity.csv")) {
        if d.severity == Severity::Error {
            return ActivityUnread::File;
        }
        // Dropped rows, not duplicates (which were counted once) or ignored values.
        if d.message.contains("dropped") && !d.message.contains("duplicate") {
            // "unknown activity `x` in 12 rows (…)" counts its rows; other messages are one row.
            let n = d
                .message
                .split_once("` in ")
                .and_then(|(_, rest)| rest.split(' ').next())
                .and_then(|n| n.parse::<u64>().ok())
                .unwrap_or(1);
            rows += n;
        }
    }
    if rows == 0 {
        ActivityUnread::Nothing
    } else {
        ActivityUnread::Rows(rows)
    }
}

/// The habits section. Its rates are the reporting period's (`period`, as the report's title
/// names it), the sessions and the longest run since enrolment: each label says which, since
/// "Weigh-ins per week" beside "attended since you joined" read as the whole program's rate.
///
/// `counts` are the period's counts and the days they are taken over. Under a week
/// ([`MIN_DAYS_FOR_A_WEEKLY_RATE`]) the module gives no rate per week: scaled to seven days,
/// someone who joined two days before the period ended read "Days with a weigh-in per week
/// 7.0" and "Activity minutes per week 210 (target 150)" from two 30-minute walks, a target
/// met that no week has tested. The counts over those days are shown instead, as a
/// practitioner reads a first few days (common practice: a weekly figure is a week's).
fn adherence_section(
    a: &AdherenceResults,
    target: f64,
    unread: &ActivityUnread,
    period: &str,
    counts: &PeriodCounts,
) -> (AdherenceView, Chart) {
    let mut items = Vec::new();
    let f1 = |v: Option<f64>| v.map(|v| fmt::fixed(v, 1));
    let days = counts.days;
    let short = (1..MIN_DAYS_FOR_A_WEEKLY_RATE).contains(&days);
    let day_s = |n: i64| format!("{n} {}", if n == 1 { "day" } else { "days" });
    let no_rate =
        format!("too few days for a rate per week, which needs {MIN_DAYS_FOR_A_WEEKLY_RATE}");
    for (rate, n, what) in [
        (a.weigh_ins_per_week, counts.weigh_in_days, "a weigh-in"),
        (a.food_log_days_per_week, counts.food_log_days, "a food log"),
    ] {
        if short {
            items.push(Kv::new(
                &format!("Days with {what}, {period}"),
                &format!("{n} of {}; {no_rate}", day_s(days)),
            ));
        } else if let Some(v) = f1(rate) {
            items.push(Kv::new(&format!("Days with {what} per week, {period}"), &v));
        }
    }
    // Under a week, the minutes over those days (the module gives no rate); else the rate.
    let minutes = if short {
        counts.activity_minutes
    } else {
        a.activity_minutes_per_week
    };
    // Never "0 minutes" when the log could not be read or there is none (the module then gives
    // no figure): say so instead.
    let shown = match unread {
        ActivityUnread::File | ActivityUnread::NoLog => Some(minutes.unwrap_or(0.0)),
        _ => minutes,
    };
    if let Some(v) = shown {
        let text = match unread {
            ActivityUnread::File => {
                "activity could not be read (activity.csv was not used; see the notes on your data)"
                    .to_string()
            }
            ActivityUnread::Rows(n) if v == 0.0 => format!(
                "activity could not be read ({} row{} left out; see the notes on your data)",
                fmt::int(*n as f64),
                if *n == 1 { "" } else { "s" }
            ),
            ActivityUnread::Rows(n) if short => format!(
                "{} in {} (target {} a week; {no_rate}); {} activity row{} could not be read and {} not counted",
                fmt::fixed(v, 0),
                day_s(days),
                fmt::fixed(target, 0),
                fmt::int(*n as f64),
                if *n == 1 { "" } else { "s" },
                if *n == 1 { "is" } else { "are" }
            ),
            ActivityUnread::Nothing if short => format!(
                "{} in {} (target {} a week; {no_rate})",
                fmt::fixed(v, 0),
                day_s(days),
                fmt::fixed(target, 0)
            ),
            ActivityUnread::Rows(n) => format!(
                "{} (target {}); {} activity row{} could not be read and {} not counted",
                fmt::fixed(v, 0),
                fmt::fixed(target, 0),
                fmt::int(*n as f64),
                if *n == 1 { "" } else { "s" },
                if *n == 1 { "is" } else { "are" }
            ),
            ActivityUnread::Nothing => {
                format!("{} (target {})", fmt::fixed(v, 0), fmt::fixed(target, 0))
            }
            ActivityUnread::NoLog => format!(
                "none logged since you joined (target {})",
                fmt::fixed(target, 0)
            ),
        };
        let label = if short && !matches!(unread, ActivityUnread::File | ActivityUnread::NoLog) {
            format!("Activity minutes (moderate-equivalent), {period}")
        } else {
            format!("Activity minutes per week (moderate-equivalent), {period}")
        };
        items.push(Kv::new(&label, &text));
    }
    if let (Some(att), Some(off)) = (a.sessions_attended_to_date, a.sessions_offered_to_date)
        && off > 0.0
    {
        items.push(Kv::new(
            "Group sessions attended since you joined",
            &format!("{att} of {off}"),
        ));
    }
    if let Some(v) = a.longest_weigh_in_streak_days {
        items.push(Kv::new(
            "Longest run of daily weigh-ins since you joined",
            &format!(
                "{} {}",
                fmt::fixed(v, 0),
                if v.round() == 1.0 { "day" } else { "days" }
            ),
        ));
    }
    let mut table = TableView {
        header: vec![
            "Week of".into(),
            "Weigh-in days".into(),
            "Food-log days".into(),
            "Activity min".into(),
            "Sessions".into(),
        ],
        rows: Vec::new(),
    };
    let mut bars = Vec::new();
    for w in &a.weekly {
        let d = w.week_start;
        let mins = w.activity_minutes.unwrap_or(0.0);
        bars.push(Bar {
            label: d.format("%-d %b").to_string(),
            value: mins,
            suppressed: false,
        });
        let offered = num_text(w.sessions_offered);
        // A week of fewer than 7 days (the first, from the day they joined, the last, to the
        // period's end or the day they left) says so: "28 Sep 2026 · 0 weigh-in days · 0
        // activity min" in a September report read as a week with none, beside full weeks,
        // when it held 3 days.
        let week = match w.days_covered {
            Some(n) if (1.0..7.0).contains(&n) => {
                let n = n.round() as i64;
                format!(
                    "{} ({n} {})",
                    fmt::date(d),
                    if n == 1 { "day" } else { "days" }
                )
            }
            _ => fmt::date(d),
        };
        table.rows.push(vec![
            week,
            num_text(w.weigh_ins),
            num_text(w.food_log_days),
            if *unread == ActivityUnread::NoLog {
                "–".into()
            } else {
                fmt::fixed(mins, 0)
            },
            if offered.is_empty() || offered == "0" {
                "–".into()
            } else {
                format!("{} of {offered}", num_text(w.sessions_attended))
            },
        ]);
    }
    let mut alt = format!(
        "Moderate-equivalent activity minutes by week, against the target of {} minutes.",
        fmt::fixed(target, 0)
    );
    if a.weekly
        .iter()
        .any(|w| w.days_covered.is_some_and(|n| (1.0..7.0).contains(&n)))
    {
        alt.push_str(
            " A week of fewer than 7 days (when you joined, or at the end of the period) gives its number of days in the table, and its counts are for those days only.",
        );
    }
    if *unread == ActivityUnread::NoLog {
        // No bars at all (the chart says there are no data): bars of 0 minutes, each labelled
        // "0", drew as measured what nobody logged, beside a caption saying the bars show none.
        bars.clear();
        alt.push_str(" No activity has been logged since you joined, so there are no bars.");
    }
    let chart = Chart::Bars(BarChart {
        title: "Activity minutes by week".into(),
        y_label: "min/week".into(),
        bars,
        target: Some(target),
        alt_text: alt.clone(),
    });
    (
        AdherenceView {
            items,
            chart: ChartView {
                title: "Adherence by week".into(),
                alt,
                table,
            },
        },
        chart,
    )
}

#[cfg(test)]
mod activity_unread_tests {
    use super::*;

    /// The headline of a person with no outcomes, in metric units, who has not left or just
    /// joined, weighs in less than asked, has weighed in, and has 20 weigh-in days in the last
    /// 28: what most headline tests vary nothing of but the trend.
    fn plain_headline(t: &TrendView) -> String {
        headline(
            Some(t),
            None,
            UnitSystem::Metric,
            None,
            None,
            false,
            false,
            20,
        )
    }

    /// Period counts over `n` days (what the module gives the report), nothing counted.
    fn days(n: i64) -> PeriodCounts {
        PeriodCounts {
            days: n,
            weigh_in_days: 0,
            food_log_days: 0,
            activity_minutes: None,
        }
    }

    /// Sample program, September 2026, SG-001: the habits table's last row read "28 Sep 2026 ·
    /// 0 · 1 · 0" beside full weeks, a week with no weigh-in and no activity, when the period
    /// left it 3 days (28-30 September). A week of fewer than 7 days gives its days; the
    /// caption says what they mean. With full weeks only, nothing is added.
    #[test]
    fn a_week_of_fewer_than_seven_days_says_how_many_it_covers() {
        let week = |d: u32, days: f64| cohortpress_metric_adherence::view::WeekRow {
            week_start: NaiveDate::from_ymd_opt(2026, 9, d).unwrap(),
            days_covered: Some(days),
            weigh_ins: Some(0.0),
            food_log_days: Some(1.0),
            activity_minutes: Some(0.0),
            sessions_offered: None,
            sessions_attended: None,
            met_weigh_in_target: None,
            met_food_log_target: None,
            met_activity_target: None,
        };
        let adherence = AdherenceResults {
            weekly: vec![week(2, 5.0), week(7, 7.0), week(28, 3.0), week(29, 1.0)],
            ..AdherenceResults::default()
        };
        let (view, _) = adherence_section(
            &adherence,
            150.0,
            &ActivityUnread::Nothing,
            "September 2026",
            &days(30),
        );
        let first: Vec<&str> = view
            .chart
            .table
            .rows
            .iter()
            .map(|r| r[0].as_str())
            .collect();
        assert_eq!(
            first,
            [
                "2 Sep 2026 (5 days)",
                "7 Sep 2026",
                "28 Sep 2026 (3 days)",
                "29 Sep 2026 (1 day)"
            ]
        );
        assert!(
            view.chart.alt.ends_with(
                " A week of fewer than 7 days (when you joined, or at the end of the period) gives its number of days in the table, and its counts are for those days only."
            ),
            "{}",
            view.chart.alt
        );
        let full = AdherenceResults {
            weekly: vec![week(7, 7.0)],
            ..AdherenceResults::default()
        };
        let (view, _) = adherence_section(
            &full,
            150.0,
            &ActivityUnread::Nothing,
            "September 2026",
            &days(30),
        );
        assert_eq!(view.chart.table.rows[0][0], "7 Sep 2026");
        assert!(
            !view.chart.alt.contains("fewer than 7 days"),
            "{}",
            view.chart.alt
        );
    }

    /// LIFE-003 of a hand-made pilot (no activity.csv): the activity chart drew a "0" over every
    /// week, while its caption said the bars show none and the tidy files leave the minutes
    /// empty (unknown, not zero).
    #[test]
    fn no_activity_logged_draws_no_bars_of_zero() {
        let week = |d: u32| cohortpress_metric_adherence::view::WeekRow {
            week_start: NaiveDate::from_ymd_opt(2026, 6, d).unwrap(),
            days_covered: Some(7.0),
            weigh_ins: Some(1.0),
            food_log_days: Some(0.0),
            activity_minutes: Some(0.0),
            sessions_offered: None,
            sessions_attended: None,
            met_weigh_in_target: None,
            met_food_log_target: None,
            met_activity_target: None,
        };
        let adherence = AdherenceResults {
            weekly: vec![week(1), week(8)],
            ..AdherenceResults::default()
        };
        let (view, chart) = adherence_section(
            &adherence,
            150.0,
            &ActivityUnread::NoLog,
            "June 2026",
            &days(30),
        );
        let Chart::Bars(bars) = &chart else {
            panic!("a bar chart")
        };
        assert!(bars.bars.is_empty(), "{:?}", bars.bars);
        assert!(
            !view.chart.alt.contains("bars show none"),
            "{}",
            view.chart.alt
        );
        // Someone who logged and did nothing that week still gets a bar of 0.
        let (_, chart) = adherence_section(
            &adherence,
            150.0,
            &ActivityUnread::Nothing,
            "June 2026",
            &days(30),
        );
        let Chart::Bars(bars) = &chart else {
            panic!("a bar chart")
        };
        assert_eq!(bars.bars.len(), 2);
    }

    fn shown(minutes: f64, diags: &[Diagnostic]) -> String {
        let adherence = AdherenceResults {
            activity_minutes_per_week: Some(minutes),
            ..AdherenceResults::default()
        };
        let (view, _) = adherence_section(
            &adherence,
            150.0,
            &activity_unread(diags),
            "September 2026",
            &days(30),
        );
        view.items
            .iter()
            .find(|k| k.label.starts_with("Activity minutes"))
            .unwrap()
            .value
            .clone()
    }

    /// Sample program, September 2026, SG-018 (left on 27 July): "5 % loss · not yet", "7 %
    /// loss · not yet" in a report that sums up the records up to the day they left.
    #[test]
    fn someone_who_left_sees_only_the_milestones_reached() {
        use cohortpress_metric_outcomes::view::MilestoneRow;
        let row = |p: f64, on: Option<&str>| MilestoneRow {
            threshold_percent: p,
            threshold_weight_kg: None,
            reached: on.is_some(),
            date_reached: on.map(|d| d.parse().unwrap()),
        };
        let rows = [row(3.0, Some("2026-06-09")), row(5.0, None), row(7.0, None)];
        let labels = |v: Vec<MilestoneView>| {
            v.into_iter()
                .map(|m| (m.label, m.reached))
                .collect::<Vec<_>>()
        };
        assert_eq!(
            labels(milestones(&rows, true, true, None, &[])),
            [("3 % loss".to_string(), true)]
        );
        assert_eq!(
            labels(milestones(&rows, true, false, None, &[])),
            [
                ("3 % loss".to_string(), true),
                ("5 % loss".to_string(), false),
                ("7 % loss".to_string(), false)
            ]
        );
    }

    /// With `withdrawal_reason: stopped_program`, SG-018 (left 27 Jul 2026) and a follow-up
    /// weigh-in on 20 Sep: the trend first reached 5 % on 3 Aug, and the report said "5 % loss ·
    /// reached 3 Aug 2026", a milestone of the program. It is now seen at follow-up, on the
    /// follow-up weigh-in's day (3 Aug is only where the trend's line across the gap crosses
    /// 5 %); one reached on or before the day left stays reached; without a withdrawal date
    /// nothing changes.
    #[test]
    fn a_milestone_first_reached_after_stopping_the_program_is_seen_at_follow_up() {
        use cohortpress_metric_outcomes::view::MilestoneRow;
        let row = |p: f64, on: Option<&str>| MilestoneRow {
            threshold_percent: p,
            threshold_weight_kg: None,
            reached: on.is_some(),
            date_reached: on.map(|d| d.parse().unwrap()),
        };
        let rows = [
            row(3.0, Some("2026-07-27")),
            row(5.0, Some("2026-08-03")),
            row(7.0, None),
        ];
        let left = NaiveDate::from_ymd_opt(2026, 7, 27);
        // Weigh-ins up to the day left, then a follow-up visit on 20 Sep: the trend crosses
        // 5 % on 3 Aug, in the gap, and the follow-up weigh-in is where it was seen.
        let days: Vec<NaiveDate> = ["2026-07-20", "2026-07-27", "2026-09-20"]
            .iter()
            .map(|d| d.parse().unwrap())
            .collect();
        let shown = |v: Vec<MilestoneView>| {
            v.into_iter()
                .map(|m| (m.label, m.reached, m.follow_up, m.reached_on))
                .collect::<Vec<_>>()
        };
        let s = |x: &str| x.to_string();
        assert_eq!(
            shown(milestones(&rows, true, true, left, &days)),
            [
                (s("3 % loss"), true, false, s("27 Jul 2026")),
                (s("5 % loss"), false, true, s("20 Sep 2026")),
            ]
        );
        assert_eq!(
            shown(milestones(&rows, true, true, None, &days)),
            [
                (s("3 % loss"), true, false, s("27 Jul 2026")),
                (s("5 % loss"), true, false, s("3 Aug 2026")),
            ]
        );
    }

    /// Sample program, September 2026, SG-001: "Weigh-ins per week 1.4" and "Activity minutes
    /// per week 123" (September's rates) stood beside "Group sessions attended since you joined
    /// 11 of 16" and "Longest run of daily weigh-ins 3 days" (since enrolment), with nothing to
    /// tell which figure covers which span; the rate counts days with a weigh-in.
    #[test]
    fn each_habit_figure_names_its_span() {
        let adherence = AdherenceResults {
            weigh_ins_per_week: Some(1.4),
            food_log_days_per_week: Some(2.6),
            activity_minutes_per_week: Some(123.0),
            sessions_attended_to_date: Some(11.0),
            sessions_offered_to_date: Some(16.0),
            longest_weigh_in_streak_days: Some(3.0),
            ..AdherenceResults::default()
        };
        let (view, _) = adherence_section(
            &adherence,
            150.0,
            &ActivityUnread::Nothing,
            "September 2026",
            &days(30),
        );
        let items: Vec<(String, String)> = view
            .items
            .iter()
            .map(|k| (k.label.clone(), k.value.clone()))
            .collect();
        let want = [
            ("Days with a weigh-in per week, September 2026", "1.4"),
            ("Days with a food log per week, September 2026", "2.6"),
            (
                "Activity minutes per week (moderate-equivalent), September 2026",
                "123 (target 150)",
            ),
            ("Group sessions attended since you joined", "11 of 16"),
            ("Longest run of daily weigh-ins since you joined", "3 days"),
        ];
        assert_eq!(
            items,
            want.iter()
                .map(|(l, v)| (l.to_string(), v.to_string()))
                .collect::<Vec<_>>()
        );
        // The weekly table's column counts days too.
        assert_eq!(view.chart.table.header[1], "Weigh-in days");
        // Someone weighing in every other day read "Longest run of daily weigh-ins since you
        // joined 1 days".
        let one = AdherenceResults {
            longest_weigh_in_streak_days: Some(1.0),
            ..AdherenceResults::default()
        };
        let (view, _) =
            adherence_section(&one, 150.0, &ActivityUnread::Nothing, "May 2026", &days(30));
        let streak = view
            .items
            .iter()
            .find(|k| k.label.starts_with("Longest run"))
            .unwrap();
        assert_eq!(streak.value, "1 day");
    }

    /// A participant with two days in the period (joined two days before it ended, or a
    /// two-day program) read "Days with a weigh-in per week 7.0" and "Activity minutes per week
    /// 210 (target 150)" from two 30-minute walks: rates scaled up from two days, a target met
    /// that no week has tested. Under 7 days the counts over those days are shown, saying why
    /// there is no weekly rate; from 7 days on the rates are as before.
    #[test]
    fn under_a_week_of_days_the_habits_are_counts_not_weekly_rates() {
        // The module's figures: under 7 days no rate, the counts over those days.
        let short = AdherenceResults::default();
        let week = AdherenceResults {
            weigh_ins_per_week: Some(7.0),
            food_log_days_per_week: Some(3.5),
            activity_minutes_per_week: Some(210.0),
            ..AdherenceResults::default()
        };
        let items = |days: i64, unread: &ActivityUnread| -> Vec<(String, String)> {
            let counts = PeriodCounts {
                days,
                weigh_in_days: days.min(2) as usize,
                food_log_days: 1,
                activity_minutes: Some(30.0 * days.min(2) as f64),
            };
            let a = if days < 7 { &short } else { &week };
            adherence_section(a, 150.0, unread, "May 2026", &counts)
                .0
                .items
                .iter()
                .map(|k| (k.label.clone(), k.value.clone()))
                .collect()
        };
        let why = "too few days for a rate per week, which needs 7";
        assert_eq!(
            items(2, &ActivityUnread::Nothing),
            [
                (
                    "Days with a weigh-in, May 2026".to_string(),
                    format!("2 of 2 days; {why}")
                ),
                (
                    "Days with a food log, May 2026".to_string(),
                    format!("1 of 2 days; {why}")
                ),
                (
                    "Activity minutes (moderate-equivalent), May 2026".to_string(),
                    format!("60 in 2 days (target 150 a week; {why})")
                ),
            ]
        );
        let rows = items(2, &ActivityUnread::Rows(3));
        assert_eq!(
            rows[2].1,
            format!(
                "60 in 2 days (target 150 a week; {why}); 3 activity rows could not be read and are not counted"
            )
        );
        // One day: "1 day".
        let one = items(1, &ActivityUnread::Nothing);
        assert!(one[0].1 == format!("1 of 1 day; {why}"), "{one:?}");
        // A week or more: the rates.
        assert_eq!(
            items(7, &ActivityUnread::Nothing),
            [
                (
                    "Days with a weigh-in per week, May 2026".to_string(),
                    "7.0".to_string()
                ),
                (
                    "Days with a food log per week, May 2026".to_string(),
                    "3.5".to_string()
                ),
                (
                    "Activity minutes per week (moderate-equivalent), May 2026".to_string(),
                    "210 (target 150)".to_string()
                ),
            ]
        );
    }

    /// Sample program, April 2026, SG-001: BMI 29.97 printed "30.0 kg/m²; your BMI is in the
    /// range 25 to 29.9". The number is cut, not rounded, where rounding would leave its class's
    /// range.
    #[test]
    fn the_bmi_shown_stays_inside_its_who_range() {
        use cohortpress_metric_outcomes::who_bmi_class;
        for (bmi, shown) in [
            (29.97, "29.9 kg/m²; your BMI is in the range 25 to 29.9"),
            (18.46, "18.4 kg/m²; your BMI is in the range below 18.5"),
            (24.95, "24.9 kg/m²; your BMI is in the range 18.5 to 24.9"),
            (25.0, "25.0 kg/m²; your BMI is in the range 25 to 29.9"),
            (31.24, "31.2 kg/m²; your BMI is in the range 30 to 34.9"),
            (31.26, "31.3 kg/m²; your BMI is in the range 30 to 34.9"),
        ] {
            let text = bmi_text(bmi, Some(who_bmi_class(bmi)));
            assert!(text.starts_with(shown), "{bmi}: {text}");
        }
    }

    /// The lab table printed `5 %` beside `5.1 %` and `93.7 mg/dL` beside `31.1 mmol/mol`.
    #[test]
    fn lab_values_keep_their_units_usual_decimals() {
        use LabTest::{DiastolicBp, FastingGlucose as G, Hba1c as A, SystolicBp};
        assert_eq!(lab_number(A, 5.0, "%"), "5.0");
        assert_eq!(lab_number(A, 5.14, "%"), "5.1");
        assert_eq!(lab_number(G, 93.7, "mg/dL"), "94");
        assert_eq!(lab_number(A, 31.1, "mmol/mol"), "31");
        assert_eq!(lab_number(G, 5.2, "mmol/L"), "5.2");
        assert_eq!(lab_number(SystolicBp, 128.0, "mmHg"), "128");
        assert_eq!(lab_number(DiastolicBp, 79.5, "mmHg"), "80");
        assert_eq!(lab_number(LabTest::Egfr, 59.4, "mL/min/1.73 m²"), "59");
        // Not rounded up across KDIGO's cut-off of 60 (G2 from 60).
        assert_eq!(lab_number(LabTest::Egfr, 59.6, "mL/min/1.73 m²"), "59");
    }

    /// Demo, 150 participants, SG-134 with a glucose-lowering medicine, September: HbA1c
    /// 47 mmol/mol (6.45 %) stood as "6.5 %" beside "prediabetes range" (6.5 % is the diabetes
    /// cut-off). A value is never rounded across the cut-off of its own range.
    #[test]
    fn lab_values_are_not_rounded_across_their_ranges_cut_off() {
        use LabTest::{FastingGlucose as G, Hba1c as A};
        let pct = cohortpress_metric_api::units::hba1c_mmolmol_to_percent(47.0);
        assert_eq!(lab_number(A, pct, "%"), "6.4");
        assert_eq!(lab_number(A, 47.0, "mmol/mol"), "47");
        assert_eq!(lab_number(A, 6.5, "%"), "6.5");
        assert_eq!(lab_number(A, 6.54, "%"), "6.5");
        assert_eq!(lab_number(A, 5.66, "%"), "5.6");
        assert_eq!(lab_number(A, 5.64, "%"), "5.6");
        // 38.6 mmol/mol is 5.68 %, normal; 39 mmol/mol would read as 5.72 %, prediabetes.
        assert_eq!(lab_number(A, 38.6, "mmol/mol"), "38");
        // 125.6 mg/dL is in the prediabetes range; "126 mg/dL" and "7.0 mmol/L" would not be.
        let mmol = 125.6 / cohortpress_metric_api::units::GLUCOSE_MGDL_PER_MMOLL;
        assert_eq!(lab_number(G, mmol, "mmol/L"), "6.9");
        assert_eq!(lab_number(G, 125.6, "mg/dL"), "125");
        assert_eq!(lab_number(G, 126.0, "mg/dL"), "126");
        assert_eq!(lab_number(G, 7.0, "mmol/L"), "7.0");
    }

    /// "Held steady over the last four weeks" stood on one clinic weigh-in in those weeks (a
    /// trial participant, May 2026: last home weigh-in 29 Mar, a clinic one on 31 May): with
    /// fewer than one weigh-in a week there, the headline says the reading rests mostly on the
    /// weeks before.
    #[test]
    fn a_level_trend_from_few_recent_weigh_ins_says_so() {
        let t = TrendView {
            status: Status::Plateau,
            ..TrendView::default()
        };
        let h = |n: usize| {
            headline(
                Some(&t),
                None,
                UnitSystem::Metric,
                None,
                None,
                false,
                false,
                n,
            )
        };
        assert_eq!(
            h(1),
            "Your weight has held steady over the last four weeks (a plateau). With one weigh-in \
             in the last four weeks, this rests mostly on the weeks before."
        );
        assert!(
            h(0).contains("With no weigh-in in the last four weeks"),
            "{}",
            h(0)
        );
        assert!(
            h(3).contains("With 3 weigh-ins in the last four weeks"),
            "{}",
            h(3)
        );
        assert_eq!(
            h(4),
            "Your weight has held steady over the last four weeks (a plateau)."
        );
        // A loss is not qualified: its slope's interval is the evidence.
        let losing = TrendView {
            status: Status::Losing,
            ..TrendView::default()
        };
        let l = headline(
            Some(&losing),
            None,
            UnitSystem::Metric,
            None,
            None,
            false,
            false,
            1,
        );
        assert!(!l.contains("rests mostly"), "{l}");
    }

    /// A trend too close to the plateau band's edge to call: "more regular weigh-ins" is advice
    /// only for someone who weighs in less than asked (a participant weighing in 4.4 times a
    /// week against a target of 3 read it, in July, losing about 0.15 kg a week).
    #[test]
    fn an_unclear_trend_asks_for_more_weigh_ins_only_of_a_sparse_weigher() {
        let mut t = TrendView {
            status: Status::Unclear,
            ..TrendView::default()
        };
        t.slope_kg_per_week.value = Some(-0.15);
        t.slope_kg_per_week.lower = Some(-0.31);
        t.slope_kg_per_week.upper = Some(0.01);
        let sparse = plain_headline(&t);
        assert_eq!(
            sparse,
            "Your weigh-ins of the last four weeks put your weight's pace at about −0.15 kg/week \
             (95 % range −0.31 to +0.01 kg/week), too uncertain yet to tell whether it is going \
             down, holding steady or going up; more regular weigh-ins would show which."
        );
        let regular = headline(
            Some(&t),
            None,
            UnitSystem::Metric,
            None,
            None,
            true,
            false,
            20,
        );
        assert_eq!(
            regular,
            "Your weigh-ins of the last four weeks put your weight's pace at about −0.15 kg/week \
             (95 % range −0.31 to +0.01 kg/week), too uncertain yet to tell whether it is going \
             down, holding steady or going up; the next weeks' weigh-ins will show which."
        );
        // A pace beyond the band whose range reaches past zero is not "little change".
        t.slope_kg_per_week.value = Some(-0.45);
        t.slope_kg_per_week.lower = Some(-1.0);
        t.slope_kg_per_week.upper = Some(0.1);
        let wide = plain_headline(&t);
        assert!(
            wide.contains("about −0.45 kg/week (95 % range −1.00 to +0.10 kg/week)"),
            "{wide}"
        );
        assert!(!wide.contains("little"), "{wide}");
        // A narrow range below zero at the band's edge is a slow fall, not "too uncertain"
        // (demo program, SG-070).
        t.slope_kg_per_week.value = Some(-0.27);
        t.slope_kg_per_week.lower = Some(-0.29);
        t.slope_kg_per_week.upper = Some(-0.24);
        assert_eq!(
            plain_headline(&t),
            "Your weight has come down slowly over the last four weeks, at about −0.27 kg/week \
             (95 % range −0.29 to −0.24 kg/week), near the pace the program counts as levelling \
             off; more regular weigh-ins would show whether it is levelling off."
        );
        t.slope_kg_per_week.value = Some(0.2);
        t.slope_kg_per_week.lower = Some(0.05);
        t.slope_kg_per_week.upper = Some(0.35);
        assert!(
            plain_headline(&t).starts_with(
                "Your weight has edged up slowly over the last four weeks, at about +0.20 kg/week"
            ),
            "{}",
            plain_headline(&t)
        );
    }

    /// A plateau the whole record shows still going (the trend module's `plateau_onset`) is
    /// named in the headline where the last four weeks give no verdict: the chart shaded it
    /// while no sentence said so.
    #[test]
    fn a_plateau_the_record_shows_is_named_where_the_last_weeks_give_no_verdict() {
        let onset = NaiveDate::from_ymd_opt(2026, 6, 5).unwrap();
        let mut t = TrendView {
            status: Status::Unclear,
            plateau_onset: Some(onset),
            ..TrendView::default()
        };
        t.slope_kg_per_week.value = Some(-0.27);
        t.slope_kg_per_week.lower = Some(-0.29);
        t.slope_kg_per_week.upper = Some(-0.24);
        assert_eq!(
            plain_headline(&t),
            "Your weight has come down slowly over the last four weeks, at about −0.27 kg/week \
             (95 % range −0.29 to −0.24 kg/week), near the pace the program counts as levelling \
             off; more regular weigh-ins would show whether it is levelling off. Read over your \
             whole record, your trend has stayed within the pace the program counts as a \
             plateau since 5 Jun 2026."
        );
        // A record that stopped a month before the period's end: up to the last weigh-in.
        t.status = Status::InsufficientData;
        t.weigh_ins.points = vec![cohortpress_metric_api::Point {
            date: NaiveDate::from_ymd_opt(2026, 8, 30).unwrap(),
            value: 95.0,
            lower: None,
            upper: None,
        }];
        assert_eq!(
            plain_headline(&t),
            "There are too few recent weigh-ins for a firm reading of how your weight moved over \
             the last four weeks. Up to your last weigh-in on 30 Aug 2026, your trend had stayed \
             within the pace the program counts as a plateau since 5 Jun 2026."
        );
        // No plateau going on: nothing added.
        t.plateau_onset = None;
        assert_eq!(
            plain_headline(&t),
            "There are too few recent weigh-ins for a firm reading of how your weight moved over \
             the last four weeks."
        );
    }

    /// "Going down, by about −1.32 kg/week" said the sign twice.
    #[test]
    fn a_falling_trend_is_told_without_a_double_sign() {
        let mut t = TrendView {
            status: Status::Losing,
            ..TrendView::default()
        };
        t.slope_kg_per_week.value = Some(-1.32);
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight trend is going down, by about 1.32 kg/week over the last four weeks."
        );
        let h = headline(
            Some(&t),
            None,
            UnitSystem::UsCustomary,
            None,
            None,
            false,
            false,
            20,
        );
        assert!(h.contains("by about 2.91 lb/week"), "{h}");
    }

    /// A sparse weigher 5.3 kg back up from their lowest trend weight (confirmed by the trend
    /// module's level test) read only "too few recent weigh-ins" and "change since start".
    #[test]
    fn a_rise_confirmed_by_level_reaches_the_headline_and_the_summary() {
        use cohortpress_metric_trend::view::RegainVerdict;
        let mut t = TrendView {
            status: Status::InsufficientData,
            regain_verdict: Some(RegainVerdict::Regaining),
            ..TrendView::default()
        };
        t.regain_kg = Interval {
            value: Some(5.29),
            lower: Some(3.82),
            upper: Some(6.75),
        };
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has come back up from its lowest point: your trend weight is now about \
             5.3 kg above its lowest point so far (95 % range 3.8 to 6.8 kg). There are too few \
             recent weigh-ins for a firm reading of how your weight moved over the last four \
             weeks."
        );
        let v = BuiltinViews {
            trend: Some(t.clone()),
            energy: None,
            adherence: None,
            outcomes: None,
        };
        let row = summary(
            &v,
            UnitSystem::Metric,
            NaiveDate::from_ymd_opt(2026, 9, 30).unwrap(),
            true,
            None,
            0.25,
        )
        .into_iter()
        .find(|k| k.label == "Back up from your lowest")
        .expect("a summary row for the rise");
        assert_eq!(row.value, "+5.3 kg (95 % range 3.8 to 6.8 kg)");
        // Not confirmed by the level test: nothing is said of a rise.
        t.regain_verdict = Some(RegainVerdict::NotRegaining);
        let h = plain_headline(&t);
        assert!(!h.contains("lowest point"), "{h}");
        // A rising slope already says so; the level sentence is not repeated.
        t.regain_verdict = Some(RegainVerdict::Regaining);
        t.status = Status::Regaining;
        t.slope_kg_per_week.value = Some(0.3);
        let h = plain_headline(&t);
        assert!(!h.contains("lowest point"), "{h}");
    }

    /// Hand-made E12 stopped recording on 15 Jul 2026; the September report's summary read
    /// "Current weight (trend) 92.5 kg", that day's trend weight.
    #[test]
    fn a_weight_from_months_ago_is_not_called_current() {
        let mut t = TrendView {
            status: Status::InsufficientData,
            ..TrendView::default()
        };
        t.current_weight_kg.value = Some(92.5);
        t.days_since_last_weigh_in = Some(77.0);
        let v = BuiltinViews {
            trend: Some(t.clone()),
            energy: None,
            adherence: None,
            outcomes: None,
        };
        let to = NaiveDate::from_ymd_opt(2026, 9, 30).unwrap();
        let row = &summary(&v, UnitSystem::Metric, to, true, None, 0.25)[0];
        assert_eq!(
            row.label,
            "Weight at your last weigh-in (15 Jul 2026, trend)"
        );
        assert_eq!(row.value, "92.5 kg");
        t.days_since_last_weigh_in = Some(3.0);
        let v = BuiltinViews {
            trend: Some(t),
            ..v
        };
        assert_eq!(
            summary(&v, UnitSystem::Metric, to, true, None, 0.25)[0].label,
            "Current weight (trend)"
        );
    }

    /// A slow, steady regain after a loss: the trend module's status is `plateau` (a slope
    /// inside the plateau band) and its verdict `regaining` (a rise from the lowest point
    /// confirmed). The headline read "Your weight has edged up over the last four weeks
    /// (+0.15 kg/week), slowly enough to count as a plateau. Your trend weight is now about
    /// 1.4 kg above its lowest point so far …": two verdicts at odds. The confirmed rise comes
    /// first, with its evidence, and the last four weeks are told without "plateau".
    #[test]
    fn a_confirmed_regain_comes_first_and_is_not_called_a_plateau() {
        use cohortpress_metric_trend::view::RegainVerdict;
        let mut t = TrendView {
            status: Status::Plateau,
            regain_verdict: Some(RegainVerdict::Regaining),
            ..TrendView::default()
        };
        t.slope_kg_per_week = Interval {
            value: Some(0.15),
            lower: Some(0.04),
            upper: Some(0.26),
        };
        t.regain_kg = Interval {
            value: Some(1.42),
            lower: Some(1.01),
            upper: Some(1.83),
        };
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has come back up from its lowest point: your trend weight is now about \
             1.4 kg above its lowest point so far (95 % range 1.0 to 1.8 kg). Over the last four \
             weeks it has kept edging up (+0.15 kg/week)."
        );
        // Level, or a stable status: still no plateau beside the rise.
        t.slope_kg_per_week.lower = Some(-0.05);
        for status in [Status::Plateau, Status::Stable] {
            t.status = status;
            let h = plain_headline(&t);
            assert!(h.starts_with("Your weight has come back up"), "{h}");
            assert!(h.ends_with("it has held about level."), "{h}");
            assert!(!h.contains("plateau"), "{h}");
        }
        // Without the confirmed rise the plateau is named as before.
        t.status = Status::Plateau;
        t.regain_verdict = Some(RegainVerdict::NotRegaining);
        assert_eq!(
            plain_headline(&t),
            "Your weight has held steady over the last four weeks (a plateau)."
        );
    }

    /// Sample seed 7, SG-227, September: "Your weight has held steady over the last four weeks
    /// (a plateau)" above "Recent rate +0.19 kg/week" whose 95 % interval (0.02 to 0.35) lies
    /// wholly above zero, inside the plateau band of a 117 kg person.
    #[test]
    fn a_plateau_that_is_still_edging_up_is_not_called_steady() {
        let mut t = TrendView {
            status: Status::Plateau,
            ..TrendView::default()
        };
        t.slope_kg_per_week = Interval {
            value: Some(0.19),
            lower: Some(0.02),
            upper: Some(0.35),
        };
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has edged up over the last four weeks (+0.19 kg/week), slowly enough to count as a plateau."
        );
        t.status = Status::Stable;
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has been nearly stable over the last four weeks, edging up slowly (+0.19 kg/week)."
        );
        // An interval that reaches zero: held steady, as before.
        t.status = Status::Plateau;
        t.slope_kg_per_week.lower = Some(-0.02);
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has held steady over the last four weeks (a plateau)."
        );
    }

    /// A man of 197 kg, BMI 50, losing 0.39 kg a week (95 % −0.50 to −0.28), inside the plateau
    /// band of 0.25 % of body weight a week (0.49 kg at his weight): "Your weight has held
    /// steady over the last four weeks (a plateau)" stood above "Recent rate −0.39 kg/week".
    #[test]
    fn a_plateau_that_is_still_edging_down_is_not_called_steady() {
        let mut t = TrendView {
            status: Status::Plateau,
            ..TrendView::default()
        };
        t.slope_kg_per_week = Interval {
            value: Some(-0.39),
            lower: Some(-0.50),
            upper: Some(-0.28),
        };
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has edged down over the last four weeks (−0.39 kg/week), slowly enough to count as a plateau."
        );
        t.status = Status::Stable;
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has been nearly stable over the last four weeks, edging down slowly (−0.39 kg/week)."
        );
        t.status = Status::Plateau;
        t.slope_kg_per_week.upper = Some(0.02);
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "Your weight has held steady over the last four weeks (a plateau)."
        );
    }

    /// The plateau's numbers said "With the intake you logged, the model expects a change of
    /// −0.28 kg/week" (sample, September, SG-003), but the energy module's expected slope is at
    /// the intake the weight trend implied early in the program, not at any logged intake.
    #[test]
    fn a_plateaus_expected_change_is_said_to_be_at_the_early_intake() {
        use cohortpress_metric_energy::view::{PlateauCause, PlateauRow};
        let r = PlateauRow {
            start: NaiveDate::from_ymd_opt(2026, 7, 1).unwrap(),
            end: NaiveDate::from_ymd_opt(2026, 9, 30).unwrap(),
            observed_slope_kg_per_week: Some(0.03),
            expected_slope_kg_per_week: Some(-0.28),
            implied_intake_before_kcal_per_day: Some(2330.0),
            implied_intake_during_kcal_per_day: Some(2814.0),
            classification: PlateauCause::IntakeDrift,
            evidence: String::new(),
            intake_change_kcal_per_day: Some(484.0),
            intake_change_lower_kcal_per_day: Some(300.0),
            intake_change_upper_kcal_per_day: Some(668.0),
        };
        assert_eq!(
            plateau_evidence(&r, UnitSystem::Metric),
            "Your weight trend implies about 2,330 kcal a day early in the program and about 2,814 kcal a day during the plateau. Eating as in those early weeks, the model expects a change of −0.28 kg/week at your weight when the plateau began; the trend shows +0.03 kg/week."
        );
    }

    /// A plateau resting on one weigh-in in four weeks (sample, SG-046: slope −0.002 kg/week,
    /// 95 % −0.672 to +0.667, at 82.8 kg) read "Recent rate (last 4 weeks) 0.00 kg/week", as
    /// precise as any. A rate whose interval is wider than the plateau band (0.25 % of the
    /// weight either side: 0.41 kg/week wide at 82.8 kg) now carries its range, as does an
    /// `unclear` one (as its headline does); a rate pinned down closer is printed alone.
    #[test]
    fn a_recent_rate_the_weigh_ins_do_not_pin_down_carries_its_range() {
        let rate = |status: Status, value: f64, lower: f64, upper: f64, kg: f64, units| {
            let mut t = TrendView {
                status,
                ..TrendView::default()
            };
            t.slope_kg_per_week.value = Some(value);
            t.slope_kg_per_week.lower = Some(lower);
            t.slope_kg_per_week.upper = Some(upper);
            t.current_weight_kg.value = Some(kg);
            t.days_since_last_weigh_in = Some(2.0);
            let v = BuiltinViews {
                trend: Some(t),
                energy: None,
                adherence: None,
                outcomes: None,
            };
            summary(
                &v,
                units,
                NaiveDate::from_ymd_opt(2026, 9, 30).unwrap(),
                true,
                None,
                0.25,
            )
            .into_iter()
            .find(|k| k.label == "Recent rate (last 4 weeks)")
            .expect("a recent rate")
            .value
        };
        assert_eq!(
            rate(
                Status::Plateau,
                -0.002,
                -0.672,
                0.667,
                82.75,
                UnitSystem::Metric
            ),
            "0.00 kg/week (95 % range −0.67 to +0.67 kg/week)"
        );
        assert_eq!(
            rate(
                Status::Plateau,
                -0.002,
                -0.672,
                0.667,
                82.75,
                UnitSystem::UsCustomary
            ),
            "0.00 lb/week (95 % range −1.48 to +1.47 lb/week)"
        );
        // Just wider than the band's 0.4138 kg/week at 82.75 kg, and just narrower.
        assert!(
            rate(
                Status::Stable,
                0.0,
                -0.207,
                0.207,
                82.75,
                UnitSystem::Metric
            )
            .contains("95 % range")
        );
        assert_eq!(
            rate(
                Status::Stable,
                0.0,
                -0.206,
                0.206,
                82.75,
                UnitSystem::Metric
            ),
            "0.00 kg/week"
        );
        // A losing rate pinned down (sample, SG-025) is printed alone; an unclear one has its
        // range whatever its width (sample, SG-033).
        assert_eq!(
            rate(
                Status::Losing,
                -0.296,
                -0.380,
                -0.211,
                94.39,
                UnitSystem::Metric
            ),
            "−0.30 kg/week"
        );
        assert_eq!(
            rate(
                Status::Unclear,
                -0.100,
                -0.254,
                0.054,
                86.65,
                UnitSystem::Metric
            ),
            "−0.10 kg/week (95 % range −0.25 to +0.05 kg/week)"
        );
    }

    /// "Too few recent weigh-ins to see how your weight moved" stood above "Recent rate (last
    /// 4 weeks) +0.44 kg/week".
    #[test]
    fn no_recent_rate_beside_too_few_weigh_ins() {
        let mut t = TrendView {
            status: Status::InsufficientData,
            ..TrendView::default()
        };
        t.slope_kg_per_week.value = Some(0.44);
        let views = |t: &TrendView| BuiltinViews {
            trend: Some(t.clone()),
            energy: None,
            adherence: None,
            outcomes: None,
        };
        let has_rate = |v: &BuiltinViews| {
            summary(
                v,
                UnitSystem::Metric,
                NaiveDate::from_ymd_opt(2026, 9, 30).unwrap(),
                true,
                None,
                0.25,
            )
            .iter()
            .any(|k| k.label.starts_with("Recent rate"))
        };
        assert!(!has_rate(&views(&t)));
        t.status = Status::Regaining;
        assert!(has_rate(&views(&t)));
    }

    /// The energy module's figures for the API's fixture participant (trend, then energy).
    fn fixture_energy() -> EnergyResults {
        use cohortpress_metric_api::view::ModuleView;
        use cohortpress_metric_api::{MetricModule, fixture};
        let data = fixture::participant();
        let t = cohortpress_metric_trend::TrendModule;
        let trend = t.compute(&fixture::context(&t.spec(), &[]), &data).unwrap();
        let m = cohortpress_metric_energy::EnergyModule;
        let out = m
            .compute(&fixture::context(&m.spec(), &[("trend", &trend)]), &data)
            .unwrap();
        EnergyResults::from_output(&out).unwrap()
    }

    /// Sample program, September 2026, SG-050: the weekly implied intake stopped after the
    /// week of 7 Sep (1,004 kcal) as her loss grew fastest; the last three weeks read "–" in
    /// the table and the line just ended, with nothing saying why.
    #[test]
    fn a_week_without_an_implied_intake_within_the_trend_is_explained() {
        let mut e = fixture_energy();
        let n = e.weekly_energy.len();
        assert!(n >= 3, "{n} weeks");
        assert!(
            e.weekly_energy
                .iter()
                .all(|r| r.implied_intake_kcal_per_day.is_some())
        );
        let first = e.weekly_energy[0].week_start;
        let last_week = e.weekly_energy[n - 1].week_start;
        let span = Some((first, last_week + chrono::Duration::days(2)));
        assert_eq!(implied_gap_note(&e.weekly_energy, span), None);
        // The last week without one, inside the trend's span: said.
        e.weekly_energy[n - 1].implied_intake_kcal_per_day = None;
        assert!(implied_gap_note(&e.weekly_energy, span).is_some());
        // A last week after the last weigh-in (no trend there), or no trend at all: nothing.
        let before_last = Some((first, last_week - chrono::Duration::days(1)));
        assert_eq!(implied_gap_note(&e.weekly_energy, before_last), None);
        assert_eq!(implied_gap_note(&e.weekly_energy, None), None);
        // No week with one (pregnancy: the module reads no intake from the trend): nothing
        // is withheld for a fast fall or rise, and the note would say so wrongly.
        for r in &mut e.weekly_energy {
            r.implied_intake_kcal_per_day = None;
        }
        assert_eq!(implied_gap_note(&e.weekly_energy, span), None);
    }

    /// The summary showed "Total energy use per day 3,002" (by energy balance over the last
    /// four weeks) above weeks of about 2,850 (equation × activity level), with one
    /// explanation saying both came from the equation. Each now says what it is.
    #[test]
    fn the_two_energy_use_figures_say_what_they_are() {
        let mut e = fixture_energy();
        assert!(e.implied_intake_kcal_per_day.value.is_some());
        let label = |v: &EnergyView| {
            v.items
                .iter()
                .find(|k| k.label.starts_with("Total energy use"))
                .unwrap()
                .label
                .clone()
        };
        let (v, chart) = energy_section(&e, "last 4 weeks", None, false);
        assert!(chart.is_some());
        assert_eq!(
            label(&v),
            "Total energy use per day (last 4 weeks, from your weight trend)"
        );
        assert!(
            v.explanation
                .contains("measured over the last 4 weeks from your weight trend")
        );
        assert!(v.explanation.contains("so the two can differ"));
        assert_eq!(v.chart.table.header[1], "Energy use, estimated (kcal/day)");
        assert_eq!(v.chart.table.header.len(), 4, "{:?}", v.chart.table.header);
        // Without a food log, no column of dashes for it.
        let mut no_log = e.clone();
        for r in &mut no_log.weekly_energy {
            r.logged_intake_kcal_per_day = None;
        }
        let (nv, _) = energy_section(&no_log, "last 4 weeks", None, false);
        assert_eq!(
            nv.chart.table.header,
            [
                "Week of",
                "Energy use, estimated (kcal/day)",
                "Implied intake"
            ]
        );
        assert!(nv.chart.table.rows.iter().all(|r| r.len() == 3));
        let (v, _) = energy_section(&e, "last 30 days", None, false);
        assert!(label(&v).contains("(last 30 days, from your weight trend)"));
        // The balance and the gap say what they are (sample program, September 2026, SG-001:
        // "Implied minus logged +670" and "Energy balance (implied) +59", both unexplained).
        if e.energy_balance_kcal_per_day.value.is_some() {
            assert!(
                v.explanation.contains(
                    "The energy balance is the implied intake minus the total energy use: above zero your body stored energy (weight goes up), below zero it drew on its reserves (weight goes down)."
                ),
                "{}",
                v.explanation
            );
        }
        if e.intake_gap_kcal_per_day.value.is_some() {
            assert!(
                v.items
                    .iter()
                    .any(|k| k.label == "Implied intake minus logged intake (last 30 days)"),
                "{:?}",
                v.items
            );
        }
        e.energy_balance_kcal_per_day.value = Some(59.0);
        let (v, _) = energy_section(&e, "last 4 weeks", None, false);
        assert!(v.explanation.contains("above zero your body stored energy"));
        e.energy_balance_kcal_per_day.value = None;
        let (v, _) = energy_section(&e, "last 4 weeks", None, false);
        assert!(!v.explanation.contains("The energy balance is"));
        // Someone who left before the period: no figures for the days after they left, and
        // their resting energy is at their last weight, not a "current" one (sample program,
        // September 2026, SG-018, left 27 July: "at your current weight" above "estimated ...
        // at your last weight").
        let left = NaiveDate::from_ymd_opt(2026, 7, 27).unwrap();
        let (v, _) = energy_section(&e, "last 4 weeks", Some(left), false);
        let labels: Vec<&str> = v.items.iter().map(|k| k.label.as_str()).collect();
        assert_eq!(
            labels,
            [
                "Resting energy (estimated, at your last weight)",
                "Resting-energy equation"
            ]
        );
        assert!(
            v.explanation
                .starts_with("You left the program on 27 Jul 2026, before this period began"),
            "{}",
            v.explanation
        );
        // Without an implied intake the total is the equation's, over the same window.
        e.implied_intake_kcal_per_day.value = None;
        let (v, _) = energy_section(&e, "last 4 weeks", None, false);
        assert_eq!(
            label(&v),
            "Total energy use per day (equation and activity, last 4 weeks)"
        );
        assert!(
            v.explanation
                .contains("the total above covers the last 4 weeks")
        );
        assert!(!v.explanation.contains("can differ"));
    }

    /// Every figure printed beside the implied intake covers its window and says so: the
    /// activity line was the period's mean, unlabelled, beside intakes of the last 4 weeks.
    /// Resting energy is at the current weight and says that instead.
    #[test]
    fn every_energy_figure_names_the_window_it_covers() {
        let mut e = fixture_energy();
        e.rmr_kcal_per_day.value = Some(1240.6);
        e.activity_net_kcal_per_day.value = Some(48.7);
        e.tdee_kcal_per_day.value = Some(2019.8);
        e.logged_intake_kcal_per_day.value = Some(1500.0);
        e.intake_gap_kcal_per_day.value = Some(200.0);
        e.energy_balance_kcal_per_day.value = Some(-320.0);
        for implied in [None, Some(1700.0)] {
            e.implied_intake_kcal_per_day.value = implied;
            let (v, _) = energy_section(&e, "last 30 days", None, false);
            let labels: Vec<&str> = v.items.iter().map(|k| k.label.as_str()).collect();
            assert!(labels.len() >= 6, "{labels:?}");
            for l in &labels {
                match *l {
                    "Resting-energy equation" => {}
                    "Resting energy (estimated, at your current weight)" => {}
                    l => assert!(l.contains("last 30 days"), "{l}"),
                }
            }
            assert!(labels.contains(&"Activity, beyond resting (average, last 30 days)"));
        }
    }

    /// Sample program, September 2026, SG-017: "Resting energy 1,241 kcal/day" and "Activity,
    /// beyond resting 49 kcal/day" stood above "Total energy use per day 2,020 kcal/day", which
    /// they do not add up to. The rest of the total now has its own line, so the printed lines
    /// add up; where the total from the weight trend is below the other two, there is no rest to
    /// show and no line.
    #[test]
    fn the_energy_lines_add_up_to_the_total_as_printed() {
        let mut e = fixture_energy();
        e.rmr_kcal_per_day.value = Some(1240.6);
        e.activity_net_kcal_per_day.value = Some(48.7);
        e.tdee_kcal_per_day.value = Some(2019.8);
        let value = |v: &EnergyView, label: &str| {
            v.items
                .iter()
                .find(|k| k.label == label)
                .map(|k| k.value.clone())
        };
        for implied in [None, Some(1700.0)] {
            e.implied_intake_kcal_per_day.value = implied;
            let (v, _) = energy_section(&e, "last 4 weeks", None, false);
            // 2,020 − 1,241 − 49 as printed (not 2,019.8 − 1,240.6 − 48.7 = 730.5 → 731).
            assert_eq!(
                value(&v, "Everyday movement and digestion (last 4 weeks)").as_deref(),
                Some("730 kcal/day")
            );
            assert!(v.explanation.contains(
                "Everyday movement and digestion is the rest of the total: moving about in daily life beyond the activity you logged, and digesting food."
            ));
            let labels: Vec<&str> = v.items.iter().map(|k| k.label.as_str()).collect();
            let at = |l: &str| labels.iter().position(|x| x.starts_with(l)).unwrap();
            assert!(at("Activity, beyond resting") < at("Everyday movement"));
            assert!(at("Everyday movement") < at("Total energy use"));
        }
        // A total from the weight trend below resting + activity: nothing to call the rest.
        e.implied_intake_kcal_per_day.value = Some(1200.0);
        e.tdee_kcal_per_day.value = Some(1250.0);
        let (v, _) = energy_section(&e, "last 4 weeks", None, false);
        assert_eq!(
            value(&v, "Everyday movement and digestion (last 4 weeks)"),
            None
        );
        assert!(!v.explanation.contains("Everyday movement"));
    }

    /// Sample program, April 2026, SG-006 (enrolled 20 April): "Total energy use per day (last
    /// 4 weeks, from your weight trend)" over 11 days of records. The module's window starts at
    /// enrolment; the label now says so.
    #[test]
    fn the_energy_window_of_a_recent_joiner_is_named_from_enrolment() {
        let d = |s: &str| s.parse::<NaiveDate>().unwrap();
        assert_eq!(
            energy_window_words(28, d("2026-04-20"), d("2026-04-30")),
            "11 days since you enrolled"
        );
        assert_eq!(
            energy_window_words(28, d("2026-04-30"), d("2026-04-30")),
            "1 day since you enrolled"
        );
        // Enrolled on the window's first day or before: the whole window.
        assert_eq!(
            energy_window_words(28, d("2026-04-03"), d("2026-04-30")),
            "last 4 weeks"
        );
        assert_eq!(
            energy_window_words(28, d("2026-01-05"), d("2026-04-30")),
            "last 4 weeks"
        );
        assert_eq!(
            energy_window_words(30, d("2026-01-05"), d("2026-04-30")),
            "last 30 days"
        );
        assert_eq!(
            energy_window_words(7, d("2026-01-05"), d("2026-04-30")),
            "last week"
        );
    }

    /// Sample program, April 2026, SG-006 (enrolled 20 April): "Weight chart for 1 Apr 2026 to
    /// 30 Apr 2026" above an axis that starts on 20 April.
    #[test]
    fn the_weight_chart_of_a_late_joiner_is_described_from_enrolment() {
        let d = |s: &str| s.parse::<NaiveDate>().unwrap();
        let start = d("2026-04-01");
        let alt = |enrolled: &str| {
            weight_chart_alt(start, d(enrolled), d("2026-04-30"), false, true, None)
        };
        assert_eq!(
            alt("2026-04-20"),
            "Weight chart for 20 Apr 2026 to 30 Apr 2026: weigh-ins, the smoothed trend with its 95 % band, and the target weight."
        );
        assert!(alt("2026-04-01").starts_with("Weight chart for 1 Apr 2026 to 30 Apr 2026:"));
        // Enrolled before the program's start date: the program's start.
        assert!(alt("2026-03-20").starts_with("Weight chart for 1 Apr 2026 "));
    }

    /// Sample program, September 2026, SG-001: the weight chart's axis ran to 9 December with a
    /// dashed forecast and its band, under "Weight chart for 1 Apr 2026 to 30 Sep 2026:
    /// weigh-ins, the smoothed trend with its 95 % band, plateau and regain periods shaded".
    #[test]
    fn the_weight_chart_names_its_forecast() {
        let d = |s: &str| s.parse::<NaiveDate>().unwrap();
        let start = d("2026-04-01");
        assert_eq!(
            weight_chart_alt(
                start,
                start,
                d("2026-09-30"),
                true,
                false,
                Some(d("2026-12-09"))
            ),
            "Weight chart for 1 Apr 2026 to 30 Sep 2026: weigh-ins, the smoothed trend with its 95 % band, plateau and regain periods shaded, and a forecast to 9 Dec 2026 (dashed) if you keep eating as in the last weeks, with the range it may fall in."
        );
        assert_eq!(
            weight_chart_alt(start, start, d("2026-09-30"), true, true, None),
            "Weight chart for 1 Apr 2026 to 30 Sep 2026: weigh-ins, the smoothed trend with its 95 % band, plateau and regain periods shaded, and the target weight."
        );
        assert_eq!(
            weight_chart_alt(start, start, d("2026-09-30"), false, false, None),
            "Weight chart for 1 Apr 2026 to 30 Sep 2026: weigh-ins, the smoothed trend with its 95 % band."
        );
    }

    /// Sample program, September 2026: clinic dots 0.5–1.1 kg above the trend line in 34 of 50
    /// reports, with nothing saying the trend takes the clinic's offset off.
    #[test]
    fn the_chart_says_which_weigh_in_sources_sit_off_the_trend_line() {
        use cohortpress_metric_trend::view::SourceOffsetRow;
        let row = |source: &str, kg: f64| SourceOffsetRow {
            source: source.into(),
            offset_kg: Some(kg),
            weigh_ins: Some(11.0),
        };
        assert_eq!(
            source_offsets_words(&[row("clinic", 0.8835)], UnitSystem::Metric),
            " Weigh-ins marked “clinic” read 0.9 kg above your home scale on average (clothing, another scale): the trend takes that off, so their dots sit about that far off the trend line."
        );
        // Within the day-to-day scatter: not named.
        assert_eq!(
            source_offsets_words(&[row("clinic", 0.41)], UnitSystem::Metric),
            ""
        );
        assert_eq!(source_offsets_words(&[], UnitSystem::Metric), "");
        assert_eq!(
            source_offsets_words(
                &[row("clinic", 0.6), row("gym scale", -0.7), row("x", 0.2)],
                UnitSystem::UsCustomary
            ),
            " Weigh-ins marked “clinic” read 1.3 lb above your home scale, and weigh-ins marked “gym scale” read 1.5 lb below your home scale on average (clothing, another scale): the trend takes that off, so their dots sit about that far off the trend line."
        );
        let long = "a".repeat(60);
        let w = source_offsets_words(&[row(&long, 1.0)], UnitSystem::Metric);
        assert!(w.contains(&format!("“{}…”", "a".repeat(40))), "{w}");
    }

    /// Sample program, April 2026, SG-006 (enrolled 20 April, 7 weigh-ins in 11 days) read
    /// "There are too few recent weigh-ins to see how your weight moved over the last four
    /// weeks", a reproach for weeks that had not yet passed. Someone with weigh-ins too few for
    /// a verdict is told so without "to see how your weight moved", which the report's own
    /// fast-loss flag from the same weeks contradicted.
    #[test]
    fn a_recent_joiner_is_told_it_is_too_early_not_that_weigh_ins_are_too_few() {
        let t = TrendView {
            status: Status::InsufficientData,
            ..TrendView::default()
        };
        let joined = "2026-04-20".parse::<NaiveDate>().unwrap();
        let h = headline(
            Some(&t),
            None,
            UnitSystem::Metric,
            None,
            Some(joined),
            false,
            false,
            20,
        );
        assert_eq!(
            h,
            "You joined on 20 Apr 2026, so it is too early to see which way your weight is moving; a few more weeks of weigh-ins will show it."
        );
        let h = plain_headline(&t);
        assert_eq!(
            h,
            "There are too few recent weigh-ins for a firm reading of how your weight moved over the last four weeks."
        );
        // None at all: not "too few".
        let h = headline(
            Some(&t),
            None,
            UnitSystem::Metric,
            None,
            None,
            false,
            true,
            20,
        );
        assert!(h.starts_with("No weigh-in is recorded yet"), "{h}");
    }

    #[test]
    fn dropped_activity_rows_are_not_shown_as_zero_minutes() {
        let file = "participants/P1/activity.csv";
        let unknown = Diagnostic::warning(
            file,
            "unknown activity `zumba gold` in 104 rows (first at line 2); without a MET value the rows are dropped",
        );
        assert_eq!(
            shown(0.0, std::slice::from_ref(&unknown)),
            "activity could not be read (104 rows left out; see the notes on your data)"
        );
        assert_eq!(
            shown(90.0, &[unknown]),
            "90 (target 150); 104 activity rows could not be read and are not counted"
        );
        let lost = Diagnostic::error(file, "no header row: missing required columns");
        assert!(
            shown(0.0, &[lost])
                .starts_with("activity could not be read (activity.csv was not used")
        );
        // Duplicates and other files do not count; a clean log shows its minutes.
        let dup = Diagnostic::warning(
            file,
            "identical to line 3 in every column, time included; the row is dropped as a duplicate",
        );
        let other = Diagnostic::warning(
            "participants/P1/weights.csv",
            "implausible weight; the row is dropped",
        );
        assert_eq!(shown(0.0, &[dup, other]), "0 (target 150)");
    }
}

#[cfg(test)]
mod trend_band_tests {
    use super::shown_trend_band;

    /// The guard on the band a report shows: kept when it is a band around its point, left out
    /// when wider than 5 % of the weight either way, of no width, not finite or not around its
    /// point (each of which the trend module should never give; the guard keeps a reader from
    /// seeing it if it does).
    #[test]
    fn a_band_no_body_could_span_or_of_no_width_is_left_out() {
        assert_eq!(
            shown_trend_band(99.0, Some(98.5), Some(99.6)),
            Some((98.5, 99.6))
        );
        // 5 % of 100 kg either way is kept; more is not.
        assert_eq!(
            shown_trend_band(100.0, Some(95.0), Some(105.0)),
            Some((95.0, 105.0))
        );
        assert_eq!(shown_trend_band(99.0, Some(6.8), Some(191.3)), None);
        assert_eq!(shown_trend_band(100.0, Some(94.0), Some(106.0)), None);
        assert_eq!(shown_trend_band(99.6, Some(99.6), Some(99.6)), None);
        assert_eq!(shown_trend_band(99.0, Some(99.2), Some(99.9)), None);
        assert_eq!(shown_trend_band(99.0, Some(f64::NAN), Some(99.9)), None);
        assert_eq!(shown_trend_band(99.0, None, Some(99.9)), None);
    }
}

//! The group report model: the de-identified statistics of [`crate::group`] turned into display
//! tables and charts. A hidden count prints as the range the rest of the report already implies
//! ("1–10", "at least 79 %"), or as "not shown (privacy)" with the reason in the
//! section's notes; figures that cannot be computed print as "–". No names, no ids.

use super::Scope;
use super::format as fmt;
use super::{ChartView, Kv, ProgramView, TableView, cautions};
use crate::group::shown::{Interval, Shown};
use crate::group::summary::Plateau;
use crate::group::{ChangeLine, GroupReport, Section, SectionStats};
use crate::render::chart::{
    BandSeries, Bar, BarChart, Chart, HLine, LineChart, LineSeries, LineStyle,
};
use chrono::NaiveDate;
use serde::Serialize;

/// What the group templates see (documented in `report-templates/CONTEXT.md`).
#[derive(Debug, Clone, Serialize)]
pub struct GroupReportContext {
    /// Program and period.
    pub program: ProgramView,
    /// Notes about the whole report (merged or withheld groups …).
    pub notes: Vec<String>,
    /// The whole program first, then each group of each split.
    pub sections: Vec<SectionView>,
    /// How each figure was computed.
    pub methods: Vec<Kv>,
    /// Cautions.
    pub cautions: Vec<String>,
    /// Smallest count shown.
    pub min_cell_size: u32,
    /// Month over month: the whole-program headline figures of every release so far, as they
    /// were published (from the ledger), oldest first; empty without a ledger.
    pub releases: TableView,
}

/// One section (the program, a site, …).
#[derive(Debug, Clone, Serialize)]
pub struct SectionView {
    /// `Whole program` or `Site: Kiln Row`.
    pub title: String,
    /// The section's own label (`Kiln Row`), as the audit notes name it.
    #[serde(skip)]
    pub label: String,
    /// Anchor id.
    pub anchor: String,
    /// Why the section is withheld, when it is.
    pub withheld: Option<String>,
    /// Enrolment and retention (label, value).
    pub enrolment: TableView,
    /// Weight change lines.
    pub outcomes: TableView,
    /// How to read the weight change lines.
    pub outcomes_note: String,
    /// Milestone shares.
    pub milestones: TableView,
    /// Adherence and plateau figures.
    pub adherence: TableView,
    /// Charts of this section (names of the drawn charts, with their text alternative and data).
    pub charts: Vec<NamedChartView>,
    /// Charts not drawn because their figures are hidden: title, why, and the data table.
    pub undrawn: Vec<ChartView>,
    /// Figures of this section withheld or shown as ranges by the audit, and why.
    pub audit_notes: Vec<String>,
}

/// A chart reference in a section.
#[derive(Debug, Clone, Serialize)]
pub struct NamedChartView {
    /// Chart name for the `chart` helper.
    pub name: String,
    /// Title, alt text and data table.
    #[serde(flatten)]
    pub view: ChartView,
}

/// The group model plus its charts.
pub struct GroupReportModel {
    /// The template context.
    pub ctx: GroupReportContext,
    /// Drawn charts by name.
    pub charts: Vec<(String, Chart)>,
}

/// What a hidden figure without a range prints: short, with the reason in the section notes.
/// "Privacy" rather than "small numbers": a figure over many people is also hidden where it
/// would let a small count be worked out by subtraction.
const HIDDEN: &str = "not shown (privacy)";

fn count(s: &Shown<u64>) -> String {
    match s {
        Shown::Value(v) => v.to_string(),
        Shown::Range { lo, hi } if lo == hi => lo.to_string(),
        Shown::Range { lo, hi } => format!("{lo}–{hi}"),
        Shown::Suppressed => HIDDEN.into(),
        Shown::NotAvailable => "–".into(),
    }
}

fn num(s: &Shown<f64>, decimals: usize, suffix: &str) -> String {
    match s {
        Shown::Value(v) => format!("{}{suffix}", fmt::fixed(*v, decimals)),
        // A share known only as a range: widened outward to whole numbers. A bound that is a
        // whole number (up to rounding error) stays as it is: 123–147 of 150 is 82–98 %, not
        // "81–99 %" (the tolerance once widened exact bounds by a whole point).
        Shown::Range { lo, hi } => {
            let whole = |v: f64, outward: fn(f64) -> f64| {
                if (v - v.round()).abs() < 1e-9 {
                    v.round()
                } else {
                    outward(v)
                }
            };
            let (lo, hi) = (whole(*lo, f64::floor), whole(*hi, f64::ceil));
            if hi >= 100.0 && lo > 0.0 {
                format!("at least {}{suffix}", fmt::fixed(lo, 0))
            } else if lo <= 0.0 && hi < 100.0 {
                format!("at most {}{suffix}", fmt::fixed(hi, 0))
            } else {
                format!("{}–{}{suffix}", fmt::fixed(lo, 0), fmt::fixed(hi, 0))
            }
        }
        Shown::Suppressed => HIDDEN.into(),
        Shown::NotAvailable => "–".into(),
    }
}

fn interval(s: &Shown<Interval>, decimals: usize) -> String {
    match s {
        Shown::Value(i) => format!(
            "{} to {}",
            fmt::fixed(i.lo, decimals),
            fmt::fixed(i.hi, decimals)
        ),
        Shown::Suppressed | Shown::Range { .. } => HIDDEN.into(),
        Shown::NotAvailable => "–".into(),
    }
}

/// `value (interval)`, or the value alone when the interval cannot be shown (a suppressed
/// figure reads "suppressed" once, not "suppressed (suppressed)").
fn with_interval(value: String, iv: &Shown<Interval>, decimals: usize) -> String {
    match iv {
        Shown::Value(_) => format!("{value} ({})", interval(iv, decimals)),
        _ => value,
    }
}

/// `value (aside)`, said once when both are hidden: the sponsor's report read "not shown
/// (privacy) (not shown (privacy))" for a hidden median with its hidden n, and so did the
/// month-over-month table's retention and 5 % columns.
fn with_aside(value: String, aside: String) -> String {
    if value == HIDDEN && aside == HIDDEN {
        value
    } else {
        format!("{value} ({aside})")
    }
}

/// Why the distribution is not drawn, and how its hidden bands are printed: as the ranges the
/// rest of the report implies, or "not shown" where none is printed. A re-issued month said
/// every hidden band was "given below as the ranges …" above a table of "not shown (privacy)",
/// and that the bands "hold too few people", which a band hidden to protect another need not.
fn hidden_bands_note<'a>(bands: impl Iterator<Item = &'a Shown<u64>>) -> String {
    let (mut total, mut ranged, mut hidden) = (0, 0, 0);
    for b in bands {
        total += 1;
        match b {
            Shown::Value(_) => {}
            Shown::Range { .. } => ranged += 1,
            _ => hidden += 1,
        }
    }
    let how = match (ranged, hidden) {
        (_, 0) => "their counts are given below as the ranges the rest of this report already \
                   implies"
            .to_string(),
        (0, _) => format!("their counts are {HIDDEN} below"),
        _ => format!(
            "{ranged} of them are given below as the ranges the rest of this report already \
             implies, and {hidden} as {HIDDEN}"
        ),
    };
    format!(
        "Not drawn as a chart: {} of the {total} bands cannot be shown exactly (too few people, \
         or a count from which a small one could be worked out), so {how}.",
        ranged + hidden
    )
}

/// `median (n)`, or plain words when nobody had data (no sessions offered in the period, say).
fn median_with_n(median: String, n: &Shown<u64>) -> String {
    match n {
        Shown::Value(0) => "no data in this period".into(),
        _ => with_aside(median, count(n)),
    }
}

/// The plateau line: how many are on a plateau, of how many with enough data, and the share.
/// A hidden number with enough data is said in words: "0 of not shown (privacy) with enough
/// data: not shown (privacy)" was the sponsor's line when only that number was hidden.
fn plateau_cell(p: &Plateau) -> String {
    match (&p.in_plateau, &p.with_verdict) {
        // The interval only when it can be shown (never "x % (not shown (…))").
        (Shown::Value(_), Shown::Value(_)) => format!(
            "{} of {} with enough data: {}",
            count(&p.in_plateau),
            count(&p.with_verdict),
            with_interval(num(&p.percent, 0, " %"), &p.ci, 0)
        ),
        // A hidden count hides its share and interval too: say it once.
        (_, Shown::Value(n)) => format!("{} (of {n} with enough data)", count(&p.in_plateau)),
        (Shown::Value(_), Shown::Range { .. }) => format!(
            "{} of {} with enough data",
            count(&p.in_plateau),
            count(&p.with_verdict)
        ),
        (_, Shown::Range { .. }) | (Shown::Suppressed, _) => count(&p.in_plateau),
        _ => format!(
            "{} (the number with enough data: {HIDDEN})",
            count(&p.in_plateau)
        ),
    }
}

/// A release's period as the ledger keeps it (`2026-08-01 to 2026-08-31`) in the words the rest
/// of the report uses (`August 2026`); the month-over-month table printed the ISO dates, the
/// only ones in the report. Anything else is printed as it is.
fn release_period_words(period: &str) -> String {
    let parsed = period.split_once(" to ").and_then(|(a, b)| {
        Some((
            NaiveDate::parse_from_str(a, "%Y-%m-%d").ok()?,
            NaiveDate::parse_from_str(b, "%Y-%m-%d").ok()?,
        ))
    });
    match parsed {
        Some((from, to)) => super::period_label(from, to),
        None => period.to_string(),
    }
}

/// The month-over-month table (whole program, as published in each release).
fn releases_table(g: &GroupReport) -> TableView {
    if g.releases.is_empty() {
        return TableView::default();
    }
    TableView {
        header: vec![
            "Period".into(),
            "Started".into(),
            "Still in the program (retention)".into(),
            "Weighed in recently".into(),
            "Mean change, baseline carried forward".into(),
            "Reached 5 % loss".into(),
        ],
        rows: g
            .releases
            .iter()
            .map(|r| {
                vec![
                    release_period_words(&r.period),
                    r.started.clone(),
                    // Releases before this figure printed only the next one (under the
                    // heading "retention"): they do not give it.
                    r.retained
                        .clone()
                        .unwrap_or_else(|| "not given in that report".into()),
                    r.with_outcome.clone(),
                    r.mean_change.clone(),
                    r.reached_5.clone(),
                ]
            })
            .collect(),
    }
}

/// The headline figures of the whole program as this report prints them (what the ledger keeps
/// for the month-over-month table).
pub fn headline(g: &GroupReport, period: &str) -> crate::group::ReleaseLine {
    let st = g.program.stats.as_ref();
    let or_withheld = |f: &dyn Fn(&SectionStats) -> String| {
        st.map_or_else(|| "withheld (too few people)".to_string(), f)
    };
    crate::group::ReleaseLine {
        period: period.to_string(),
        started: or_withheld(&|s| count(&s.enrolment.started)),
        retained: Some(or_withheld(&|s| {
            with_aside(
                count(&s.enrolment.retained),
                num(&s.enrolment.retention_percent, 0, " %"),
            )
        })),
        with_outcome: or_withheld(&|s| {
            with_aside(
                count(&s.enrolment.with_outcome),
                num(&s.enrolment.with_outcome_percent, 0, " %"),
            )
        }),
        mean_change: or_withheld(&|s| num(&s.weight_change.bocf.percent.mean, 1, " %")),
        reached_5: or_withheld(&|s| {
            s.milestones
                .iter()
                .find(|m| (m.loss_at_least_percent - 5.0).abs() < 1e-9)
                .map_or("–".into(), |m| {
                    with_aside(count(&m.reached), num(&m.percent, 0, " %"))
                })
        }),
    }
}

fn change_row(label: &str, c: &ChangeLine) -> Vec<String> {
    vec![
        label.into(),
        count(&c.n),
        with_interval(num(&c.percent.mean, 1, " %"), &c.percent.mean_ci, 1),
        with_interval(num(&c.percent.median, 1, " %"), &c.percent.median_ci, 1),
    ]
}

/// Builds the group model.
pub fn build(plan: &Scope<'_>, g: &GroupReport, left_out: usize) -> GroupReportModel {
    let mut charts = Vec::new();
    let mut sections = vec![section(
        plan,
        &g.program,
        "Whole program",
        "program",
        &mut charts,
    )];
    let mut notes = g.notes.clone();
    for split in &g.splits {
        if let Some(n) = &split.note {
            notes.push(n.clone());
        }
        for (i, s) in split.sections.iter().enumerate() {
            let title = format!("{}: {}", fmt::capitalise(&split.key), s.label);
            let anchor = format!("{}-{i}", split.key);
            sections.push(section(plan, s, &title, &anchor, &mut charts));
        }
    }
    // No number: the count of folders left out is a count of people the audit never sees. A
    // month re-issued with one folder broken had its enrolled count hidden by the audit (it
    // differs from the first release's by one person), and "One participant folder could not
    // be used" gave it back by subtraction. The staff's data-quality list has the number.
    if left_out > 0 {
        notes.push("Some participant folders could not be used because of input errors and are not counted here; the program staff's data-quality list (metrics/data-quality.csv, identified: not for the sponsor) names them and the problems.".to_string());
    }
    let m = &g.methods;
    let methods = [
        Kv::new(
            "Who counts (modified intention-to-treat)",
            &m.itt_denominator,
        ),
        Kv::new("Retention", &m.retention),
        Kv::new("Withdrawal", &m.withdrawal),
        Kv::new("Weights", &m.weights),
        Kv::new("Missing outcome, primary (BOCF)", &m.bocf),
        Kv::new("Sensitivity (LOCF)", &m.locf),
        Kv::new("Completers", &m.completers),
        Kv::new("Weekly trajectory", &m.trajectory),
        Kv::new("Adherence medians", &m.adherence),
        Kv::new("Mean intervals", &m.mean_interval),
        Kv::new("Median intervals", &m.median_interval),
        Kv::new("Proportion intervals", &m.proportion_interval),
        Kv::new("Small cells", &m.suppression),
        Kv::new("Small groups", &m.small_groups),
    ]
    .into_iter()
    .map(|kv| Kv {
        value: without_own_label(&kv.label, &kv.value),
        ..kv
    })
    .collect();
    for sv in &mut sections {
        // One sentence per rule, listing the figures it applied to.
        let mut by_rule: Vec<(&str, Vec<&str>)> = Vec::new();
        for a in g.audit.iter().filter(|a| sv.label == a.section) {
            match by_rule.iter_mut().find(|(r, _)| *r == a.rule) {
                Some((_, figs)) => figs.push(&a.figure),
                None => by_rule.push((&a.rule, vec![&a.figure])),
            }
        }
        sv.audit_notes = by_rule
            .into_iter()
            .map(|(rule, figs)| format!("{}: {}.", rule, figs.join("; ")))
            .collect();
    }
    let ctx = GroupReportContext {
        program: ProgramView::new(plan),
        notes,
        sections,
        methods,
        cautions: cautions::group(g.min_cell_size),
        min_cell_size: g.min_cell_size,
        releases: releases_table(g),
    };
    GroupReportModel { ctx, charts }
}

fn section(
    plan: &Scope<'_>,
    s: &Section,
    title: &str,
    anchor: &str,
    charts: &mut Vec<(String, Chart)>,
) -> SectionView {
    let mut view = SectionView {
        title: title.into(),
        label: s.label.clone(),
        anchor: anchor.into(),
        withheld: s.withheld.clone(),
        enrolment: TableView::default(),
        outcomes: TableView::default(),
        outcomes_note: String::new(),
        milestones: TableView::default(),
        adherence: TableView::default(),
        charts: Vec::new(),
        undrawn: Vec::new(),
        audit_notes: Vec::new(),
    };
    let Some(st) = &s.stats else {
        if view.withheld.is_none() {
            view.withheld =
                Some("Withheld: too few participants to report without identifying anyone.".into());
        }
        return view;
    };
    fill(plan, st, anchor, &mut view, charts);
    view
}

fn fill(
    plan: &Scope<'_>,
    st: &SectionStats,
    anchor: &str,
    view: &mut SectionView,
    charts: &mut Vec<(String, Chart)>,
) {
    let e = &st.enrolment;
    view.enrolment = TableView {
        header: vec!["".into(), "Participants".into()],
        rows: vec![
            vec!["Enrolled".into(), count(&e.enrolled)],
            vec!["Active at the end of the period".into(), count(&e.active)],
            vec!["Withdrawn".into(), count(&e.withdrawn)],
            vec![
                "Started (baseline weight recorded)".into(),
                count(&e.started),
            ],
            // Those outside the modified intention-to-treat figures (no baseline): a count
            // group.json already gives, suppressed and audited as every count of the section.
            vec![
                "Enrolled without a baseline weight (outside the weight-change figures)".into(),
                count(&e.not_started),
            ],
            vec![
                "Started and still in the program at the end of the period".into(),
                count(&e.retained),
            ],
            vec!["Started and withdrew".into(), count(&e.discontinued)],
            vec![
                "Retention (still in the program, of those who started)".into(),
                num(&e.retention_percent, 0, " %"),
            ],
            vec![
                "With a weigh-in in the last 4 weeks of the period".into(),
                with_aside(
                    count(&e.with_outcome),
                    num(&e.with_outcome_percent, 0, " % of those who started"),
                ),
            ],
        ],
    };
    let w = &st.weight_change;
    view.outcomes = TableView {
        header: vec![
            "Weight change from baseline".into(),
            "n".into(),
            "Mean (95 % CI)".into(),
            "Median (95 % CI)".into(),
        ],
        rows: vec![
            change_row(
                "Modified intention-to-treat, baseline carried forward",
                &w.bocf,
            ),
            change_row(
                "Modified intention-to-treat, last observation carried forward",
                &w.locf,
            ),
            change_row("Completers only", &w.completers),
        ],
    };
    view.outcomes_note = "Percent change of body weight from each participant's baseline; negative values are losses. The (modified) intention-to-treat lines count everyone who started, that is everyone enrolled with a baseline weight (those without one are counted in the table above and are outside these lines): someone without a weigh-in in the last 4 weeks of the period counts as unchanged (baseline carried forward: the first line, the primary and conservative figure) or at their last weigh-in (last observation carried forward). Completers only counts just those with a weigh-in in the last 4 weeks. CI: 95 % confidence interval, the range the true mean or median likely lies in.".into();
    view.milestones = TableView {
        header: vec![
            "Loss of at least".into(),
            "Reached".into(),
            "Of".into(),
            "Share (95 % CI)".into(),
        ],
        rows: st
            .milestones
            .iter()
            .map(|m| {
                vec![
                    format!("{} %", fmt::fixed(m.loss_at_least_percent, 0)),
                    count(&m.reached),
                    count(&m.denominator),
                    with_interval(num(&m.percent, 0, " %"), &m.ci, 0),
                ]
            })
            .collect(),
    };
    let a = &st.adherence;
    let p = &st.plateau;
    view.adherence = TableView {
        header: vec!["Measure".into(), "Median (n), or count".into()],
        rows: vec![
            vec![
                "Activity minutes per week (moderate-equivalent)".into(),
                median_with_n(
                    num(&a.activity_minutes_per_week.median, 0, ""),
                    &a.activity_minutes_per_week.n,
                ),
            ],
            vec![
                "Days with a weigh-in per week".into(),
                median_with_n(
                    num(&a.weigh_ins_per_week.median, 1, ""),
                    &a.weigh_ins_per_week.n,
                ),
            ],
            vec![
                "Food-log days per week".into(),
                median_with_n(
                    num(&a.food_log_days_per_week.median, 1, ""),
                    &a.food_log_days_per_week.n,
                ),
            ],
            vec![
                "Session attendance since enrolment".into(),
                median_with_n(
                    num(&a.attendance_percent.median, 0, " %"),
                    &a.attendance_percent.n,
                ),
            ],
            vec![
                "On a plateau at the end of the period (count)".into(),
                plateau_cell(p),
            ],
            vec![
                "People with a flag for clinician review (count)".into(),
                count(&st.with_clinician_review_flag),
            ],
        ],
    };

    // Distribution of % change.
    let hist_name = format!("{anchor}-distribution");
    let bars: Vec<Bar> = st
        .histogram
        .bins
        .iter()
        .map(|b| Bar {
            label: b.label.to_string(),
            value: b.count.value().copied().unwrap_or(0) as f64,
            suppressed: !matches!(b.count, Shown::Value(_)),
        })
        .collect();
    let hist_alt = "Number of participants by percent weight change from baseline (modified intention-to-treat, baseline carried forward).".to_string();
    let hist_table = TableView {
        header: vec!["Change".into(), "Participants".into()],
        rows: st
            .histogram
            .bins
            .iter()
            .map(|b| vec![b.label.to_string(), count(&b.count)])
            .collect(),
    };
    let hidden_bins = st
        .histogram
        .bins
        .iter()
        .filter(|b| !matches!(b.count, Shown::Value(_)))
        .count();
    if hidden_bins > 0 {
        // No chart with empty bars on a meaningless axis: say what is missing, show the table.
        view.undrawn.push(ChartView {
            title: "Distribution of weight change".into(),
            // Whom the bands count is said here too: without it a sponsor cannot tell the
            // table from a completers' distribution.
            alt: format!(
                "{hist_alt} {}",
                hidden_bands_note(st.histogram.bins.iter().map(|b| &b.count))
            ),
            table: hist_table,
        });
    } else {
        charts.push((
            hist_name.clone(),
            Chart::Bars(BarChart {
                title: "Distribution of weight change".into(),
                y_label: "participants".into(),
                bars,
                target: None,
                alt_text: hist_alt.clone(),
            }),
        ));
        view.charts.push(NamedChartView {
            name: hist_name.clone(),
            view: ChartView {
                title: "Distribution of weight change".into(),
                alt: hist_alt,
                table: hist_table,
            },
        });
    }

    // Mean trajectory by week since enrolment. A week whose mean is withheld is a gap in the
    // line and its band (NaN), so the chart never draws an interpolated value across it.
    let start = plan.program.info.start;
    if let Some(chart) = trajectory_chart(start, &st.trajectory) {
        let name = format!("{anchor}-trajectory");
        let alt = chart.alt_text.clone();
        let table = TableView {
            header: vec!["Week".into(), "n".into(), "Mean change (95 % CI)".into()],
            rows: st
                .trajectory
                .iter()
                .map(|wp| {
                    vec![
                        (wp.week + 1).to_string(),
                        count(&wp.n),
                        with_interval(num(&wp.mean_percent, 1, " %"), &wp.ci, 1),
                    ]
                })
                .collect(),
        };
        charts.push((name.clone(), Chart::Line(chart)));
        view.charts.push(NamedChartView {
            name: name.clone(),
            view: ChartView {
                title: "Mean weight change by week (those still weighing in)".into(),
                alt,
                table,
            },
        });
    } else if !st.trajectory.is_empty() {
        view.undrawn.push(ChartView {
            title: "Mean weight change by week (those still weighing in)".into(),
            alt: "Not drawn: fewer than two weeks have enough people for a mean that reveals \
                  nobody's own change."
                .into(),
            table: TableView::default(),
        });
    }
}

/// The chart of the mean weight change by week since enrolment, each week on the day it ends
/// from the program's start; `None` when fewer than two weeks have a mean shown. A week whose
/// mean is withheld is a gap (NaN) in the line and its band, and the axis runs over every week
/// of the table, shown or not: it ran only to the last week with a mean, so a site whose means
/// were hidden from week 8 on (40 people, September) got a chart of 8 Apr – 20 May in a
/// September report, the hidden weeks cut off rather than the gap its caption names.
fn trajectory_chart(
    start: NaiveDate,
    trajectory: &[crate::group::summary::WeekPoint],
) -> Option<LineChart> {
    let day = |week: u32| start + chrono::Duration::days(7 * i64::from(week + 1));
    let pts: Vec<_> = trajectory
        .iter()
        .map(|wp| {
            let m = wp.mean_percent.value().copied().unwrap_or(f64::NAN);
            (day(wp.week), m, wp.ci.value().copied())
        })
        .collect();
    if pts.iter().filter(|p| p.1.is_finite()).count() < 2 {
        return None;
    }
    let alt = "Mean percent weight change by week since enrolment, with its 95 % confidence band, over the participants whose weight trend reaches that week (n in the table, exact while everyone who started is counted and otherwise given as a range, so that weeks cannot be subtracted from one another to count the few who stopped in between): someone who stopped weighing in leaves the later weeks, so these are means of those still weighing in, not intention-to-treat, and later weeks lean towards the people who stayed. A week whose mean is not shown (too few participants, or a figure from which a small count could be worked out by subtraction) is a gap in the line. Weeks are counted from each participant's enrolment and placed on the axis from the program's start date.".to_string();
    let x_span = match (pts.first(), pts.last()) {
        (Some(a), Some(b)) => Some((a.0, b.0)),
        _ => None,
    };
    Some(LineChart {
        title: "Mean weight change by week (those still weighing in)".into(),
        y_label: "% change".into(),
        lines: vec![LineSeries {
            label: "Mean % change".into(),
            points: pts.iter().map(|(d, m, _)| (*d, *m)).collect(),
            style: LineStyle::Solid,
        }],
        bands: vec![BandSeries {
            label: "95 % CI".into(),
            points: pts
                .iter()
                .map(|(d, m, ci)| match ci {
                    Some(c) if m.is_finite() => (*d, c.lo, c.hi),
                    _ => (*d, f64::NAN, f64::NAN),
                })
                .collect(),
        }],
        spans: vec![],
        hlines: vec![HLine {
            label: "No change".into(),
            y: 0.0,
        }],
        vlines: vec![],
        alt_text: alt,
        x_span,
    })
}

/// A method's text without the label it opens with when the report's own label names it
/// already: group.json keeps "Retention: of those who started …" (its fields have no labels),
/// and the report printed "Retention | Retention: of those who started …" (tryout23). The
/// text's label is dropped when its first word is a word of the report's label
/// ("Sensitivity" in "Sensitivity (LOCF)"); one that says more ("Baseline" beside "Weights",
/// "95 % interval for a mean") is kept.
fn without_own_label(label: &str, text: &str) -> String {
    let Some((own, rest)) = text.split_once(": ") else {
        return text.to_string();
    };
    let words = |s: &str| -> Vec<String> {
        s.split(|c: char| !c.is_alphanumeric())
            .filter(|w| !w.is_empty())
            .map(str::to_lowercase)
            .collect()
    };
    let first = words(own).into_iter().next();
    let short = own.len() <= 40 && !own.contains('.');
    match first {
        Some(w) if short && words(label).contains(&w) && !rest.is_empty() => {
            // The sentence now starts here.
            let mut chars = rest.chars();
            chars
                .next()
                .map(|c| c.to_uppercase().chain(chars).collect())
                .unwrap_or_default()
        }
        _ => text.to_string(),
    }
}

#[cfg(test)]
mod method_label_tests {
    use super::without_own_label;

    #[test]
    fn a_method_s_text_does_not_repeat_the_label_printed_beside_it() {
        assert_eq!(
            without_own_label("Retention", "Retention: of those who started, the share"),
            "Of those who started, the share"
        );
        assert_eq!(
            without_own_label("Sensitivity (LOCF)", "Sensitivity: a missing weight"),
            "A missing weight"
        );
        assert_eq!(
            without_own_label(
                "Who counts (modified intention-to-treat)",
                "Modified intention to treat: everyone enrolled"
            ),
            "Everyone enrolled"
        );
        // A label that says more than the report's is kept.
        assert_eq!(
            without_own_label("Weights", "Baseline: each participant's first weigh-in"),
            "Baseline: each participant's first weigh-in"
        );
        assert_eq!(
            without_own_label("Mean intervals", "95 % interval for a mean: Student t."),
            "95 % interval for a mean: Student t."
        );
        assert_eq!(
            without_own_label(
                "Small cells",
                "No count from 1 to 10 is shown; 0 is shown: x"
            ),
            "No count from 1 to 10 is shown; 0 is shown: x"
        );
    }
}

#[cfg(test)]
mod trajectory_chart_tests {
    use crate::group::shown::{Interval, Shown};
    use crate::group::summary::WeekPoint;
    use crate::render::chart::{Chart, to_svg};
    use chrono::NaiveDate;

    /// A site of 40 whose weekly means are hidden from week 8 on (tryout23's own program,
    /// September): the chart's axis ended on 20 May, the last week with a mean, and the
    /// weeks to 30 Sep were not there at all. It now runs to the last week of the table, so
    /// the hidden weeks are the gap the caption names.
    #[test]
    fn the_weekly_mean_chart_runs_over_hidden_weeks_at_its_end() {
        let start = NaiveDate::from_ymd_opt(2026, 4, 1).unwrap();
        let weeks: Vec<WeekPoint> = (0..26)
            .map(|w| {
                let shown = w < 7;
                let m = -0.3 * f64::from(w + 1);
                WeekPoint {
                    week: w,
                    n: if w < 8 {
                        Shown::Value(40)
                    } else {
                        Shown::Range { lo: 11, hi: 39 }
                    },
                    mean_percent: if shown {
                        Shown::Value(m)
                    } else {
                        Shown::Suppressed
                    },
                    ci: if shown {
                        Shown::Value(Interval {
                            lo: m - 0.3,
                            hi: m + 0.3,
                        })
                    } else {
                        Shown::Suppressed
                    },
                }
            })
            .collect();
        let chart = super::trajectory_chart(start, &weeks).expect("7 weeks with a mean");
        assert_eq!(
            chart.x_span,
            Some((
                NaiveDate::from_ymd_opt(2026, 4, 8).unwrap(),
                NaiveDate::from_ymd_opt(2026, 9, 30).unwrap()
            ))
        );
        // The drawn axis reaches September (its ticks were 8 Apr … 20 May).
        let svg = to_svg(&Chart::Line(chart), 700, 260);
        assert!(svg.contains(" Sep"), "{svg}");
        // Fewer than two weeks with a mean: no chart.
        let one: Vec<WeekPoint> = weeks
            .iter()
            .cloned()
            .map(|mut w| {
                if w.week > 0 {
                    w.mean_percent = Shown::Suppressed;
                }
                w
            })
            .collect();
        assert!(super::trajectory_chart(start, &one).is_none());
    }
}

#[cfg(test)]
mod release_period_tests {
    /// Sample program, September 2026, after an August run: the month-over-month table's
    /// periods read "2026-08-01 to 2026-08-31", the only ISO dates in a report that writes
    /// "1 Apr 2026 – 30 Sep 2026" everywhere else.
    #[test]
    fn release_periods_read_as_the_report_names_periods() {
        assert_eq!(
            super::release_period_words("2026-08-01 to 2026-08-31"),
            "August 2026"
        );
        assert_eq!(
            super::release_period_words("2026-09-01 to 2026-09-15"),
            "1 Sep 2026 – 15 Sep 2026"
        );
        assert_eq!(super::release_period_words("spring"), "spring");
    }
}

#[cfg(test)]
mod range_share_tests {
    use super::num;
    use crate::group::shown::Shown;

    /// Demo program (150 participants, September): retention known only as 123–147 of 150
    /// people is 82–98 %, and the report printed "123–147 (81–99 %)"; the 5 % milestone's
    /// 32–57 of 150 (21.3–38 %) read "21–39 %". A share whose bound is a whole number keeps it;
    /// only a fractional bound is widened outward.
    #[test]
    fn a_share_known_as_a_range_keeps_its_whole_number_bounds() {
        let range = |lo, hi| Shown::Range { lo, hi };
        assert_eq!(num(&range(82.0, 98.0), 0, " %"), "82–98 %");
        assert_eq!(
            num(&range(100.0 * 32.0 / 150.0, 100.0 * 57.0 / 150.0), 0, " %"),
            "21–38 %"
        );
        // A bound a rounding error away from a whole number is that number.
        assert_eq!(
            num(&range(81.999_999_999_99, 98.000_000_000_01), 0, " %"),
            "82–98 %"
        );
        // Fractional bounds are still widened outward, never inward.
        assert_eq!(num(&range(79.4, 98.6), 0, " %"), "79–99 %");
        assert_eq!(num(&range(79.4, 100.0), 0, " %"), "at least 79 %");
        assert_eq!(num(&range(0.0, 6.67), 0, " %"), "at most 7 %");
    }
}

#[cfg(test)]
mod hidden_twice_tests {
    use super::{HIDDEN, median_with_n, plateau_cell, with_aside};
    use crate::group::shown::Shown;
    use crate::group::summary::Plateau;

    /// A re-issued month with one folder broken (4 people, min 3): every count hidden. The
    /// sponsor's report read "not shown (privacy) (not shown (privacy))" in the adherence
    /// table and the month-over-month table, and "0 of not shown (privacy) with enough data:
    /// not shown (privacy)" for the plateau.
    #[test]
    fn the_undrawn_distribution_says_how_its_hidden_bands_are_printed() {
        let bands = [
            Shown::Value(0),
            Shown::Suppressed,
            Shown::Value(0),
            Shown::Suppressed,
        ];
        let note = super::hidden_bands_note(bands.iter());
        assert!(!note.contains("ranges"), "{note}");
        assert!(note.contains("2 of the 4 bands"), "{note}");
        assert!(note.contains(HIDDEN), "{note}");
        let bands = [Shown::Range { lo: 0, hi: 4 }, Shown::Value(0)];
        let note = super::hidden_bands_note(bands.iter());
        assert!(note.contains("1 of the 2 bands"), "{note}");
        assert!(note.contains("as the ranges"), "{note}");
        assert!(!note.contains(HIDDEN), "{note}");
    }

    #[test]
    fn a_hidden_figure_with_a_hidden_aside_is_said_once() {
        assert_eq!(median_with_n(HIDDEN.into(), &Shown::Suppressed), HIDDEN);
        assert_eq!(with_aside(HIDDEN.into(), HIDDEN.into()), HIDDEN);
        assert_eq!(with_aside("4".into(), "100 %".into()), "4 (100 %)");
        assert_eq!(
            median_with_n("3.0".into(), &Shown::Range { lo: 3, hi: 4 }),
            "3.0 (3–4)"
        );
        let plateau = |in_plateau, with_verdict| Plateau {
            with_verdict,
            in_plateau,
            not_in_plateau: Shown::Suppressed,
            insufficient_data: Shown::Suppressed,
            percent: Shown::Suppressed,
            ci: Shown::Suppressed,
        };
        assert_eq!(
            plateau_cell(&plateau(Shown::Value(0), Shown::Suppressed)),
            format!("0 (the number with enough data: {HIDDEN})")
        );
        assert_eq!(
            plateau_cell(&plateau(Shown::Suppressed, Shown::Suppressed)),
            HIDDEN
        );
        assert_eq!(
            plateau_cell(&plateau(Shown::Suppressed, Shown::Value(12))),
            format!("{HIDDEN} (of 12 with enough data)")
        );
    }
}

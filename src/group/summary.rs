//! Building the de-identified [`GroupReport`] from participant summaries.
//!
//! Definitions used throughout (also carried in the report as [`Methods`] text):
//! - *enrolled*: rows with `enrolled = true` (other rows are ignored); *active* = enrolled and
//!   not withdrawn; *started* = has a baseline weight (the ITT denominator); *with outcome* =
//!   started and has an outcome weight at the time point; retention = with outcome / started.
//! - % change = 100 · (W − W₀)/W₀ per participant (negative = loss); kg change = W − W₀.
//!   BOCF: a missing outcome is the baseline (0 % change), n = started. LOCF: a missing outcome
//!   is the last observed weight, or the baseline when there is none, n = started.
//!   Completers: only those with an outcome (REFERENCE §8.3).
//! - Milestones ≥ 3, 5, 7, 10 % loss and the histogram use the BOCF changes, denominator =
//!   started. A change counts as reaching k % when it is ≤ −k % (1e-9 tolerance for rounding
//!   of values exactly on a boundary).
//! - Trajectory: per week index, mean % change of the started participants with a value that
//!   week (one value per participant and week: the last one given).
//! - Adherence: medians over the enrolled participants with a value.
//! - Plateau: share in a plateau among enrolled participants with a verdict.
//!
//! Privacy: see [`crate::group::suppress`] for cell suppression. Sections: a split section
//! (one value of a `group_by` key) with fewer than `min_cell_size` started is withheld, and all
//! such sections of the split are merged into one "combined" section; if that still has fewer
//! than `min_cell_size` started, the smallest shown sections are added to it until it reaches
//! the minimum. Then no withheld section can be recovered by subtracting the shown sections
//! from the program total: the difference is the combined section, itself large enough. If the
//! combined section would hold every value, the split is not shown at all (it would repeat the
//! program). A program with fewer than `min_cell_size` started is withheld entirely.

use std::collections::{BTreeMap, BTreeSet};

use serde::Serialize;

use super::shown::{Interval, Shown};
use super::stats;
use super::suppress::{CellId, CellTable};
use super::{GroupOptions, ParticipantSummary};

/// Loss thresholds (% of baseline weight) of the milestone lines (REFERENCE §8.3).
pub const MILESTONE_LOSS_PERCENT: [f64; 4] = [3.0, 5.0, 7.0, 10.0];

/// Histogram bins of % change: (label, lower bound, upper bound). Loss bins include their upper
/// bound (a loss of exactly 5 % is in "−7 to −5", matching the 5 % milestone); 0 % and gains
/// start the "0 to +3" bin; "≥ +3" includes +3.
const BINS: [(&str, Option<f64>, Option<f64>); 7] = [
    ("≤ −10 %", None, Some(-10.0)),
    ("−10 to −7 %", Some(-10.0), Some(-7.0)),
    ("−7 to −5 %", Some(-7.0), Some(-5.0)),
    ("−5 to −3 %", Some(-5.0), Some(-3.0)),
    ("−3 to 0 %", Some(-3.0), Some(0.0)),
    ("0 to +3 %", Some(0.0), Some(3.0)),
    ("≥ +3 %", Some(3.0), None),
];

/// For each milestone, the number of leading bins whose changes reach it (bins 0..k).
const MILESTONE_BINS: [usize; 4] = [4, 3, 2, 1];

/// Tolerance for values that sit exactly on a boundary but carry rounding error.
const BOUNDARY_EPS: f64 = 1e-9;

fn bin_of(change: f64) -> usize {
    if change <= -10.0 + BOUNDARY_EPS {
        0
    } else if change <= -7.0 + BOUNDARY_EPS {
        1
    } else if change <= -5.0 + BOUNDARY_EPS {
        2
    } else if change <= -3.0 + BOUNDARY_EPS {
        3
    } else if change < -BOUNDARY_EPS {
        4
    } else if change < 3.0 - BOUNDARY_EPS {
        5
    } else {
        6
    }
}

fn reaches(change: f64, loss_percent: f64) -> bool {
    change <= -loss_percent + BOUNDARY_EPS
}

/// The de-identified group report: what the group templates show.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct GroupReport {
    /// Smallest count shown (counts 1 … min_cell_size − 1 are suppressed).
    pub min_cell_size: u32,
    /// Confidence level of every interval (e.g. 0.95).
    pub confidence: f64,
    /// How every figure was computed, in plain words, for a methods box.
    pub methods: Methods,
    /// Notes about the run of the group step (e.g. an invalid confidence level replaced).
    pub notes: Vec<String>,
    /// The whole program.
    pub program: Section,
    /// One entry per `group_by` key, in the configured order.
    pub splits: Vec<Split>,
}

/// Plain-language method statements carried with the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Methods {
    /// Who is in the intention-to-treat denominator.
    pub itt_denominator: String,
    /// The primary missing-data rule.
    pub bocf: String,
    /// The sensitivity rule.
    pub locf: String,
    /// Completers-only analysis.
    pub completers: String,
    /// Interval for a mean.
    pub mean_interval: String,
    /// Interval for a median.
    pub median_interval: String,
    /// Interval for a proportion.
    pub proportion_interval: String,
    /// Small-cell suppression.
    pub suppression: String,
    /// How small groups of a split are handled.
    pub small_groups: String,
}

impl Methods {
    fn new(min: u32, confidence: f64) -> Self {
        let c = confidence * 100.0;
        Methods {
            itt_denominator: "Intention to treat: everyone enrolled who has a baseline weight \
                              (started)."
                .into(),
            bocf: "Primary: a missing weight at the time point is replaced by the baseline \
                   weight (no change counted), which assumes no benefit."
                .into(),
            locf: "Sensitivity: a missing weight at the time point is replaced by the last \
                   observed weight (the baseline if there is none)."
                .into(),
            completers: "Completers: only participants with a weight at the time point; this \
                         tends to overstate success."
                .into(),
            mean_interval: format!("{c:.0} % interval for a mean: Student t (mean ± t × SE)."),
            median_interval: format!(
                "{c:.0} % interval for a median: distribution-free, from order statistics and \
                 the binomial distribution (Conover, Practical Nonparametric Statistics)."
            ),
            proportion_interval: format!(
                "{c:.0} % interval for a share: Wilson score interval (Wilson 1927)."
            ),
            suppression: format!(
                "No count from 1 to {} is shown; 0 is shown. Further cells are hidden so that \
                 no hidden count can be worked out from the shown ones, and a share, mean or \
                 interval is hidden when a count it rests on is hidden.",
                min.saturating_sub(1)
            ),
            small_groups: format!(
                "A group with fewer than {min} participants who started is not shown on its \
                 own; such groups are reported together as one combined group (with the \
                 next-smallest group added if needed to reach {min})."
            ),
        }
    }
}

/// All sections of one `group_by` key.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Split {
    /// The group attribute key (e.g. `site`).
    pub key: String,
    /// One section per value (in value order; participants without the key form a
    /// "(not recorded)" section), then the combined section if any.
    pub sections: Vec<Section>,
    /// Set when the split is not shown at all, with the reason.
    pub note: Option<String>,
}

/// What a section stands for.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum SectionKind {
    /// The whole program.
    Program,
    /// One value of a split key.
    Group,
    /// Several small values of a split key reported together.
    Combined,
}

/// One block of the report: the program, one group, or a combined group.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Section {
    /// Program, group or combined.
    pub kind: SectionKind,
    /// Heading, e.g. "Whole program", "Kiln Row", "Other site groups combined".
    pub label: String,
    /// The split key, for groups and combined sections.
    pub key: Option<String>,
    /// The group value; `None` for the program, the combined section and "(not recorded)".
    pub value: Option<String>,
    /// For a combined section: the labels of the groups it holds.
    pub members: Vec<String>,
    /// For a group reported inside a combined section: that section's label.
    pub combined_into: Option<String>,
    /// Set when the section's figures are withheld, with the note to print instead.
    pub withheld: Option<String>,
    /// The figures; `None` when withheld.
    pub stats: Option<SectionStats>,
}

/// The figures of one shown section.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct SectionStats {
    /// Enrolment and retention counts.
    pub enrolment: Enrolment,
    /// Weight change under BOCF, LOCF and completers.
    pub weight_change: WeightChange,
    /// Shares reaching ≥ 3, 5, 7, 10 % loss (BOCF, denominator = started).
    pub milestones: Vec<Milestone>,
    /// Distribution of % change (BOCF, n = started).
    pub histogram: Histogram,
    /// Mean % change by week since enrolment (every week index seen in the program).
    pub trajectory: Vec<WeekPoint>,
    /// Adherence medians.
    pub adherence: Adherence,
    /// Plateau prevalence.
    pub plateau: Plateau,
    /// Number of clinician-review flags raised (a count only).
    pub clinician_review_flags: Shown<u64>,
}

/// Enrolment and retention.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Enrolment {
    /// Counted in the program.
    pub enrolled: Shown<u64>,
    /// Enrolled and not withdrawn.
    pub active: Shown<u64>,
    /// Withdrew on or before the period end.
    pub withdrawn: Shown<u64>,
    /// Has a baseline weight (ITT denominator).
    pub started: Shown<u64>,
    /// Enrolled without a baseline weight.
    pub not_started: Shown<u64>,
    /// Started and has a weight at the time point.
    pub with_outcome: Shown<u64>,
    /// Started without a weight at the time point.
    pub without_outcome: Shown<u64>,
    /// Retention, % = with outcome / started × 100.
    pub retention_percent: Shown<f64>,
}

/// Weight change under the three missing-data rules.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WeightChange {
    /// Baseline carried forward (primary, conservative).
    pub bocf: ChangeLine,
    /// Last observation carried forward (sensitivity).
    pub locf: ChangeLine,
    /// Completers only.
    pub completers: ChangeLine,
}

/// One line of weight-change results.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChangeLine {
    /// Number of participants in this line.
    pub n: Shown<u64>,
    /// % change of body weight (negative = loss).
    pub percent: ChangeStats,
    /// Change in kg (negative = loss).
    pub kg: ChangeStats,
}

/// Summary statistics of one change variable.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ChangeStats {
    /// Mean.
    pub mean: Shown<f64>,
    /// Sample standard deviation.
    pub sd: Shown<f64>,
    /// t-based interval for the mean.
    pub mean_ci: Shown<Interval>,
    /// Median.
    pub median: Shown<f64>,
    /// Distribution-free interval for the median.
    pub median_ci: Shown<Interval>,
    /// Exact coverage of the median interval (≥ the confidence level).
    pub median_ci_coverage: Shown<f64>,
}

/// Share reaching a loss threshold.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Milestone {
    /// Threshold: loss of at least this % of baseline weight.
    pub loss_at_least_percent: f64,
    /// Participants reaching it (BOCF).
    pub reached: Shown<u64>,
    /// Participants not reaching it (BOCF).
    pub not_reached: Shown<u64>,
    /// Denominator (= started).
    pub denominator: Shown<u64>,
    /// Share reaching it, %.
    pub percent: Shown<f64>,
    /// Wilson interval of the share, %.
    pub ci: Shown<Interval>,
}

/// Counts of % change in fixed bins.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Histogram {
    /// Which changes are binned: always "bocf" (everyone started, missing = 0 %).
    pub population: &'static str,
    /// Number binned (= started).
    pub n: Shown<u64>,
    /// The bins, from the largest loss to gains.
    pub bins: Vec<HistogramBin>,
}

/// One histogram bin.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HistogramBin {
    /// Display label.
    pub label: &'static str,
    /// Lower bound, % (none for the first bin). Loss bins exclude it; "0 to +3" and "≥ +3"
    /// include it.
    pub lower_percent: Option<f64>,
    /// Upper bound, % (none for the last bin). Loss bins include it; "−3 to 0" and "0 to +3"
    /// exclude it.
    pub upper_percent: Option<f64>,
    /// Participants in the bin.
    pub count: Shown<u64>,
}

/// Mean % change in one week since enrolment.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WeekPoint {
    /// Week index since enrolment.
    pub week: u32,
    /// Participants with a value that week.
    pub n: Shown<u64>,
    /// Mean % change.
    pub mean_percent: Shown<f64>,
    /// t-based interval of the mean.
    pub ci: Shown<Interval>,
}

/// Adherence medians.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Adherence {
    /// Activity minutes per week.
    pub activity_minutes_per_week: AdherenceLine,
    /// Weigh-ins per week.
    pub weigh_ins_per_week: AdherenceLine,
    /// Food-log days per week.
    pub food_log_days_per_week: AdherenceLine,
    /// Session attendance, %.
    pub attendance_percent: AdherenceLine,
}

/// One adherence measure.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct AdherenceLine {
    /// Participants with a value.
    pub n: Shown<u64>,
    /// Median over them.
    pub median: Shown<f64>,
}

/// Plateau prevalence.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Plateau {
    /// Participants with a verdict (in a plateau or not).
    pub with_verdict: Shown<u64>,
    /// In a plateau.
    pub in_plateau: Shown<u64>,
    /// Not in a plateau.
    pub not_in_plateau: Shown<u64>,
    /// Enrolled without enough data for a verdict.
    pub insufficient_data: Shown<u64>,
    /// Share in a plateau among those with a verdict, %.
    pub percent: Shown<f64>,
    /// Wilson interval of that share, %.
    pub ci: Shown<Interval>,
}

// ---------------------------------------------------------------------------------------------
// Raw (unsuppressed) figures of one section.

/// Every count of a section that can be a cell, by what it counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Kind {
    Enrolled,
    Active,
    Withdrawn,
    Started,
    NotStarted,
    WithOutcome,
    WithoutOutcome,
    Reached(usize),
    NotReached(usize),
    Bin(usize),
    Week(u32),
    AdherenceN(usize),
    PlateauWithVerdict,
    PlateauYes,
    PlateauNo,
    PlateauInsufficient,
    Flags,
}

impl Kind {
    /// Complement choice rank: lower is hidden first, so that the denominators of the
    /// analyses (started, with outcome) survive whenever another cell can protect instead.
    fn priority(self) -> u8 {
        match self {
            Kind::NotStarted | Kind::WithoutOutcome | Kind::NotReached(_) => 0,
            Kind::PlateauInsufficient => 0,
            Kind::Active | Kind::Withdrawn | Kind::Bin(_) | Kind::Flags => 1,
            Kind::PlateauYes | Kind::PlateauNo => 1,
            Kind::Reached(_) | Kind::Week(_) | Kind::AdherenceN(_) => 2,
            Kind::PlateauWithVerdict => 2,
            Kind::Enrolled => 3,
            Kind::WithOutcome => 4,
            Kind::Started => 5,
        }
    }
}

#[derive(Debug, Clone, Default)]
struct Raw {
    counts: BTreeMap<Kind, u64>,
    bocf_pct: Vec<f64>,
    bocf_kg: Vec<f64>,
    locf_pct: Vec<f64>,
    locf_kg: Vec<f64>,
    comp_pct: Vec<f64>,
    comp_kg: Vec<f64>,
    weeks: BTreeMap<u32, Vec<f64>>,
    adherence: [Vec<f64>; 4],
}

impl Raw {
    fn count(&self, k: Kind) -> u64 {
        self.counts.get(&k).copied().unwrap_or(0)
    }
}

fn is_started(r: &ParticipantSummary) -> bool {
    r.started && r.baseline_kg.is_some_and(|b| b.is_finite() && b > 0.0)
}

fn raw_section(rows: &[&ParticipantSummary], weeks: &BTreeSet<u32>) -> Raw {
    let mut raw = Raw::default();
    let mut counts: BTreeMap<Kind, u64> = BTreeMap::new();
    let mut inc = |k: Kind| *counts.entry(k).or_insert(0) += 1;
    let mut flags = 0u64;
    for r in rows {
        inc(Kind::Enrolled);
        inc(if r.withdrawn {
            Kind::Withdrawn
        } else {
            Kind::Active
        });
        match r.in_plateau {
            Some(true) => {
                inc(Kind::PlateauWithVerdict);
                inc(Kind::PlateauYes);
            }
            Some(false) => {
                inc(Kind::PlateauWithVerdict);
                inc(Kind::PlateauNo);
            }
            None => inc(Kind::PlateauInsufficient),
        }
        flags += u64::from(r.clinical_flags);
        let measures = [
            r.activity_minutes_per_week,
            r.weigh_ins_per_week,
            r.food_log_days_per_week,
            r.attendance_percent,
        ];
        for (i, m) in measures.iter().enumerate() {
            if let Some(v) = m.filter(|v| v.is_finite()) {
                raw.adherence[i].push(v);
                inc(Kind::AdherenceN(i));
            }
        }
        if !is_started(r) {
            inc(Kind::NotStarted);
            continue;
        }
        inc(Kind::Started);
        let b = r.baseline_kg.unwrap_or_default();
        let outcome = r.outcome_kg.filter(|w| w.is_finite());
        let pct = |w: f64| 100.0 * (w - b) / b;
        let bocf = outcome.unwrap_or(b);
        let locf = outcome
            .or(r.last_observed_kg.filter(|w| w.is_finite()))
            .unwrap_or(b);
        raw.bocf_pct.push(pct(bocf));
        raw.bocf_kg.push(bocf - b);
        raw.locf_pct.push(pct(locf));
        raw.locf_kg.push(locf - b);
        if let Some(w) = outcome {
            inc(Kind::WithOutcome);
            raw.comp_pct.push(pct(w));
            raw.comp_kg.push(w - b);
        } else {
            inc(Kind::WithoutOutcome);
        }
        let c = pct(bocf);
        inc(Kind::Bin(bin_of(c)));
        for (i, &k) in MILESTONE_LOSS_PERCENT.iter().enumerate() {
            inc(if reaches(c, k) {
                Kind::Reached(i)
            } else {
                Kind::NotReached(i)
            });
        }
        // One value per participant and week: the last one given.
        let mut per_week: BTreeMap<u32, f64> = BTreeMap::new();
        for &(w, v) in &r.weekly_change_percent {
            if v.is_finite() {
                per_week.insert(w, v);
            }
        }
        for (w, v) in per_week {
            raw.weeks.entry(w).or_default().push(v);
        }
    }
    counts.insert(Kind::Flags, flags);
    for &w in weeks {
        counts.insert(
            Kind::Week(w),
            raw.weeks.get(&w).map_or(0, |v| v.len() as u64),
        );
    }
    raw.counts = counts;
    raw
}

/// The kinds every section registers as cells.
fn all_kinds(weeks: &BTreeSet<u32>) -> Vec<Kind> {
    let mut k = vec![
        Kind::Enrolled,
        Kind::Active,
        Kind::Withdrawn,
        Kind::Started,
        Kind::NotStarted,
        Kind::WithOutcome,
        Kind::WithoutOutcome,
    ];
    for i in 0..MILESTONE_LOSS_PERCENT.len() {
        k.push(Kind::Reached(i));
        k.push(Kind::NotReached(i));
    }
    k.extend((0..BINS.len()).map(Kind::Bin));
    k.extend(weeks.iter().map(|&w| Kind::Week(w)));
    k.extend((0..4).map(Kind::AdherenceN));
    k.extend([
        Kind::PlateauWithVerdict,
        Kind::PlateauYes,
        Kind::PlateauNo,
        Kind::PlateauInsufficient,
        Kind::Flags,
    ]);
    k
}

/// The additive relations inside one section, as (total, parts).
fn section_relations() -> Vec<(Kind, Vec<Kind>)> {
    let mut r = vec![
        (Kind::Enrolled, vec![Kind::Active, Kind::Withdrawn]),
        (Kind::Enrolled, vec![Kind::Started, Kind::NotStarted]),
        (Kind::Started, vec![Kind::WithOutcome, Kind::WithoutOutcome]),
        (Kind::Started, (0..BINS.len()).map(Kind::Bin).collect()),
        (
            Kind::Enrolled,
            vec![Kind::PlateauWithVerdict, Kind::PlateauInsufficient],
        ),
        (
            Kind::PlateauWithVerdict,
            vec![Kind::PlateauYes, Kind::PlateauNo],
        ),
    ];
    for (i, &nbins) in MILESTONE_BINS.iter().enumerate() {
        r.push((Kind::Started, vec![Kind::Reached(i), Kind::NotReached(i)]));
        r.push((Kind::Reached(i), (0..nbins).map(Kind::Bin).collect()));
    }
    r
}

/// A section under construction: its rows' figures and (if shown) its cells.
struct Draft {
    kind: SectionKind,
    label: String,
    key: Option<String>,
    value: Option<String>,
    members: Vec<String>,
    combined_into: Option<String>,
    withheld: Option<String>,
    raw: Option<Raw>,
    cells: BTreeMap<Kind, CellId>,
}

impl Draft {
    fn shown(&self) -> bool {
        self.withheld.is_none()
    }
}

const NOT_RECORDED: &str = "(not recorded)";

fn withheld_note(min: u32) -> String {
    format!("fewer than {min} participants — withheld")
}

/// Builds the group report (see the module documentation for every definition).
pub fn summarize(rows: &[ParticipantSummary], opts: &GroupOptions) -> GroupReport {
    build(rows, opts, true)
}

/// `suppress = false` gives the same structure with every cell shown: the truth the
/// suppression tests compare against.
pub(super) fn build(
    rows: &[ParticipantSummary],
    opts: &GroupOptions,
    suppress: bool,
) -> GroupReport {
    let mut notes = Vec::new();
    let confidence = if opts.confidence > 0.5 && opts.confidence < 1.0 {
        opts.confidence
    } else {
        notes.push(format!(
            "confidence level {} is outside (0.5, 1); 0.95 was used",
            opts.confidence
        ));
        0.95
    };
    let min = opts.min_cell_size;
    let enrolled: Vec<&ParticipantSummary> = rows.iter().filter(|r| r.enrolled).collect();
    let weeks: BTreeSet<u32> = enrolled
        .iter()
        .filter(|r| is_started(r))
        .flat_map(|r| r.weekly_change_percent.iter().map(|&(w, _)| w))
        .collect();
    let started_of =
        |rs: &[&ParticipantSummary]| rs.iter().filter(|r| is_started(r)).count() as u64;
    let min64 = u64::from(min);

    let program_small = started_of(&enrolled) < min64;
    let mut program = Draft {
        kind: SectionKind::Program,
        label: "Whole program".into(),
        key: None,
        value: None,
        members: Vec::new(),
        combined_into: None,
        withheld: program_small.then(|| withheld_note(min)),
        raw: (!program_small).then(|| raw_section(&enrolled, &weeks)),
        cells: BTreeMap::new(),
    };

    // Sections of each split, with the merge rule for small groups.
    let mut splits: Vec<(String, Vec<Draft>, Option<String>)> = Vec::new();
    for key in &opts.group_by {
        let mut by_value: BTreeMap<Option<String>, Vec<&ParticipantSummary>> = BTreeMap::new();
        for r in &enrolled {
            by_value
                .entry(r.groups.get(key).cloned())
                .or_default()
                .push(r);
        }
        let label_of = |v: &Option<String>| v.clone().unwrap_or_else(|| NOT_RECORDED.into());
        let mut merged: BTreeSet<Option<String>> = by_value
            .iter()
            .filter(|(_, rs)| started_of(rs) < min64)
            .map(|(v, _)| v.clone())
            .collect();
        if !merged.is_empty() {
            let mut total: u64 = merged.iter().map(|v| started_of(&by_value[v])).sum();
            let mut rest: Vec<(u64, Option<String>)> = by_value
                .iter()
                .filter(|(v, _)| !merged.contains(*v))
                .map(|(v, rs)| (started_of(rs), v.clone()))
                .collect();
            rest.sort();
            let mut rest = rest.into_iter();
            while total < min64 {
                let Some((n, v)) = rest.next() else { break };
                total += n;
                merged.insert(v);
            }
        }
        let collapsed = !merged.is_empty() && merged.len() == by_value.len();
        let combined_label = format!("Other {key} groups combined");
        let mut drafts = Vec::new();
        for (v, rs) in &by_value {
            let is_merged = merged.contains(v);
            let small = started_of(rs) < min64;
            let withheld = if !is_merged {
                None
            } else if small {
                Some(withheld_note(min))
            } else {
                Some(format!(
                    "reported with smaller groups in “{combined_label}”"
                ))
            };
            drafts.push(Draft {
                kind: SectionKind::Group,
                label: label_of(v),
                key: Some(key.clone()),
                value: v.clone(),
                members: Vec::new(),
                combined_into: (is_merged && !collapsed).then(|| combined_label.clone()),
                withheld,
                raw: (!is_merged).then(|| raw_section(rs, &weeks)),
                cells: BTreeMap::new(),
            });
        }
        let note = if collapsed && !by_value.is_empty() {
            Some(format!(
                "not shown by {key}: the groups are too small to show separately, and combined \
                 they are the whole program"
            ))
        } else {
            None
        };
        if !merged.is_empty() && !collapsed {
            let rs: Vec<&ParticipantSummary> = merged
                .iter()
                .flat_map(|v| by_value[v].iter().copied())
                .collect();
            drafts.push(Draft {
                kind: SectionKind::Combined,
                label: combined_label.clone(),
                key: Some(key.clone()),
                value: None,
                members: merged.iter().map(label_of).collect(),
                combined_into: None,
                withheld: None,
                raw: Some(raw_section(&rs, &weeks)),
                cells: BTreeMap::new(),
            });
        }
        splits.push((key.clone(), drafts, note));
    }

    // Cells and relations.
    let kinds = all_kinds(&weeks);
    let mut table = CellTable::new();
    let register = |d: &mut Draft, bias: u8, table: &mut CellTable| {
        if let Some(raw) = &d.raw {
            for &k in &kinds {
                let id = table.add_cell(raw.count(k), k.priority() * 2 + bias);
                d.cells.insert(k, id);
            }
            for (t, parts) in section_relations() {
                table.add_relation(d.cells[&t], parts.iter().map(|p| d.cells[p]).collect());
            }
        }
    };
    register(&mut program, 1, &mut table);
    for (_, drafts, _) in &mut splits {
        for d in drafts.iter_mut().filter(|d| d.shown()) {
            register(d, 0, &mut table);
        }
    }
    if program.shown() {
        for (_, drafts, _) in &splits {
            let shown: Vec<&Draft> = drafts.iter().filter(|d| d.shown()).collect();
            if shown.is_empty() {
                continue;
            }
            for &k in &kinds {
                table.add_relation(
                    program.cells[&k],
                    shown.iter().map(|d| d.cells[&k]).collect(),
                );
            }
        }
    }
    if suppress {
        table.apply(min);
    }

    let finish = |d: &Draft| Section {
        kind: d.kind.clone(),
        label: d.label.clone(),
        key: d.key.clone(),
        value: d.value.clone(),
        members: d.members.clone(),
        combined_into: d.combined_into.clone(),
        withheld: d.withheld.clone(),
        stats: d
            .raw
            .as_ref()
            .filter(|_| d.shown())
            .map(|raw| section_stats(raw, &d.cells, &table, confidence)),
    };
    GroupReport {
        min_cell_size: min,
        confidence,
        methods: Methods::new(min, confidence),
        notes,
        program: finish(&program),
        splits: splits
            .iter()
            .map(|(key, drafts, note)| Split {
                key: key.clone(),
                sections: drafts.iter().map(finish).collect(),
                note: note.clone(),
            })
            .collect(),
    }
}

fn interval_pct((lo, hi): (f64, f64)) -> Interval {
    Interval {
        lo: 100.0 * lo,
        hi: 100.0 * hi,
    }
}

fn change_stats(values: &[f64], hidden: bool, confidence: f64) -> ChangeStats {
    let mci = stats::mean_ci_t(values, confidence);
    let medci = stats::median_ci(values, confidence);
    ChangeStats {
        mean: Shown::from_option(stats::mean(values), hidden),
        sd: Shown::from_option(mci.map(|m| m.sd), hidden),
        mean_ci: Shown::from_option(mci.map(|m| Interval { lo: m.lo, hi: m.hi }), hidden),
        median: Shown::from_option(stats::median(values), hidden),
        median_ci: Shown::from_option(medci.map(|m| Interval { lo: m.lo, hi: m.hi }), hidden),
        median_ci_coverage: Shown::from_option(medci.map(|m| m.coverage), hidden),
    }
}

fn section_stats(
    raw: &Raw,
    cells: &BTreeMap<Kind, CellId>,
    table: &CellTable,
    confidence: f64,
) -> SectionStats {
    let hidden = |k: Kind| table.is_suppressed(cells[&k]);
    let count = |k: Kind| {
        if hidden(k) {
            Shown::Suppressed
        } else {
            Shown::Value(raw.count(k))
        }
    };
    let z = stats::z_for_confidence(confidence);
    let share = |x: Kind, n: Kind| {
        let h = hidden(x) || hidden(n);
        let (xv, nv) = (raw.count(x), raw.count(n));
        let pct = (nv > 0).then(|| 100.0 * xv as f64 / nv as f64);
        let ci = (nv > 0).then(|| interval_pct(stats::wilson(xv, nv, z)));
        (Shown::from_option(pct, h), Shown::from_option(ci, h))
    };
    let line = |n: Kind, pct: &[f64], kg: &[f64]| ChangeLine {
        n: count(n),
        percent: change_stats(pct, hidden(n), confidence),
        kg: change_stats(kg, hidden(n), confidence),
    };
    let (retention_percent, _) = share(Kind::WithOutcome, Kind::Started);
    let milestones = MILESTONE_LOSS_PERCENT
        .iter()
        .enumerate()
        .map(|(i, &k)| {
            let (percent, ci) = share(Kind::Reached(i), Kind::Started);
            Milestone {
                loss_at_least_percent: k,
                reached: count(Kind::Reached(i)),
                not_reached: count(Kind::NotReached(i)),
                denominator: count(Kind::Started),
                percent,
                ci,
            }
        })
        .collect();
    let bins = BINS
        .iter()
        .enumerate()
        .map(|(i, &(label, lower, upper))| HistogramBin {
            label,
            lower_percent: lower,
            upper_percent: upper,
            count: count(Kind::Bin(i)),
        })
        .collect();
    let trajectory = cells
        .keys()
        .filter_map(|&k| match k {
            Kind::Week(w) => Some(w),
            _ => None,
        })
        .map(|w| {
            let h = hidden(Kind::Week(w));
            let empty = Vec::new();
            let vals = raw.weeks.get(&w).unwrap_or(&empty);
            let mci = stats::mean_ci_t(vals, confidence);
            WeekPoint {
                week: w,
                n: count(Kind::Week(w)),
                mean_percent: Shown::from_option(stats::mean(vals), h),
                ci: Shown::from_option(mci.map(|m| Interval { lo: m.lo, hi: m.hi }), h),
            }
        })
        .collect();
    let adherence_line = |i: usize| AdherenceLine {
        n: count(Kind::AdherenceN(i)),
        median: Shown::from_option(
            stats::median(&raw.adherence[i]),
            hidden(Kind::AdherenceN(i)),
        ),
    };
    let (plateau_percent, plateau_ci) = share(Kind::PlateauYes, Kind::PlateauWithVerdict);
    SectionStats {
        enrolment: Enrolment {
            enrolled: count(Kind::Enrolled),
            active: count(Kind::Active),
            withdrawn: count(Kind::Withdrawn),
            started: count(Kind::Started),
            not_started: count(Kind::NotStarted),
            with_outcome: count(Kind::WithOutcome),
            without_outcome: count(Kind::WithoutOutcome),
            retention_percent,
        },
        weight_change: WeightChange {
            bocf: line(Kind::Started, &raw.bocf_pct, &raw.bocf_kg),
            locf: line(Kind::Started, &raw.locf_pct, &raw.locf_kg),
            completers: line(Kind::WithOutcome, &raw.comp_pct, &raw.comp_kg),
        },
        milestones,
        histogram: Histogram {
            population: "bocf",
            n: count(Kind::Started),
            bins,
        },
        trajectory,
        adherence: Adherence {
            activity_minutes_per_week: adherence_line(0),
            weigh_ins_per_week: adherence_line(1),
            food_log_days_per_week: adherence_line(2),
            attendance_percent: adherence_line(3),
        },
        plateau: Plateau {
            with_verdict: count(Kind::PlateauWithVerdict),
            in_plateau: count(Kind::PlateauYes),
            not_in_plateau: count(Kind::PlateauNo),
            insufficient_data: count(Kind::PlateauInsufficient),
            percent: plateau_percent,
            ci: plateau_ci,
        },
        clinician_review_flags: count(Kind::Flags),
    }
}

//! Building the de-identified [`GroupReport`] from participant summaries.
//!
//! Definitions used throughout (also carried in the report as [`Methods`] text):
//! - *enrolled*: rows with `enrolled = true` (other rows are ignored); *active* = enrolled and
//!   not withdrawn; *started* = has a baseline weight (the denominator of the modified
//!   intention-to-treat figures: someone enrolled without a weigh-in has no baseline, and the
//!   count of such people, `not_started`, is printed beside it); *with outcome* =
//!   started and has an outcome weight at the time point; *retained* = started and not
//!   withdrawn by the period's end, *discontinued* = started and withdrawn by then.
//!   Retention = retained / started: the share of those who started who are still in the
//!   program, as a participant flow reports it (CONSORT 2010 flow diagram: allocated, then
//!   "discontinued intervention" and "lost to follow-up" apart from "analysed"; Schulz KF et
//!   al., *BMJ* 2010;340:c332). A withdrawal in the month lowers it even when the person
//!   weighed in before leaving. The share *with an outcome weight* (with outcome / started) is
//!   a separate figure: it is how complete the outcome data are, not how many stayed (someone
//!   who withdrew a week before the period's end still has one; someone still enrolled who
//!   stopped weighing in has none).
//! - % change = 100 · (W − W₀)/W₀ per participant (negative = loss); kg change = W − W₀.
//!   BOCF: a missing outcome is the baseline (0 % change), n = started. LOCF: a missing outcome
//!   is the last observed weight, or the baseline when there is none, n = started.
//!   Completers: only those with an outcome (their biases: Ware JH, *N Engl J Med*
//!   2003;348:2136, from memory).
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

use std::collections::{BTreeMap, BTreeSet, HashMap, HashSet};

use serde::Serialize;

use super::audit;
use super::shown::{Interval, Shown};
use super::stats;
use super::suppress::{CellId, CellTable};
use super::venn;
use super::{GroupOptions, History, ParticipantSummary, Published};

/// Loss thresholds (% of baseline weight) of the milestone lines (the bands commonly
/// reported; common practice).
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
    /// Figures the subtraction audit withheld or showed only as a range, and the rule that
    /// did it (no value is given).
    pub audit: Vec<AuditNote>,
    /// Month over month: the whole program's headline figures as each release printed them,
    /// oldest first, this one last (filled from the ledger by the runner; empty otherwise).
    pub releases: Vec<ReleaseLine>,
    /// The whole program.
    pub program: Section,
    /// One entry per `group_by` key, in the configured order.
    pub splits: Vec<Split>,
}

/// The whole program's headline figures of one release, as printed.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, serde::Deserialize)]
pub struct ReleaseLine {
    /// Reporting period, e.g. "2026-09-01 to 2026-09-30".
    pub period: String,
    /// Started (ITT denominator).
    pub started: String,
    /// With a recent weigh-in, and its share of those started. The ledger's key stays
    /// `retention`: releases before the retention of [`Enrolment::retention_percent`] (still in
    /// the program) printed this figure under that name, and their lines are read as they are.
    #[serde(rename = "retention")]
    pub with_outcome: String,
    /// Still in the program (started and not withdrawn), and retention; `None` in the lines of
    /// releases made before this figure was printed.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub retained: Option<String>,
    /// Mean % change, baseline carried forward.
    pub mean_change: String,
    /// Reached 5 % loss, count and share.
    pub reached_5: String,
}

/// One figure withheld or coarsened by the audit.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct AuditNote {
    /// Section label, e.g. "Whole program".
    pub section: String,
    /// Which figure, e.g. "weight change, last observation carried forward".
    pub figure: String,
    /// The rule that withheld or coarsened it.
    pub rule: String,
}

/// Plain-language method statements carried with the report.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Methods {
    /// Who is in the intention-to-treat denominator.
    pub itt_denominator: String,
    /// What retention and the share with an outcome weight count.
    pub retention: String,
    /// What a withdrawal does to the figures (which weigh-ins are used).
    pub withdrawal: String,
    /// What the baseline weight and the weight at the time point are.
    pub weights: String,
    /// The primary missing-data rule.
    pub bocf: String,
    /// The sensitivity rule.
    pub locf: String,
    /// Completers-only analysis.
    pub completers: String,
    /// What the weekly trajectory's weeks and values are.
    pub trajectory: String,
    /// Who the adherence medians cover.
    pub adherence: String,
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
            // A modified intention-to-treat set, and named so: an analysis of every
            // participant as enrolled needs an outcome (observed or imputed) for each, and
            // someone enrolled without any weigh-in has no baseline from which a change could
            // be measured or carried forward. ICH E9 (1998, §5.2.1) lets the full analysis set
            // leave out those without any data after randomisation; CONSORT 2010 (items 13b
            // and 16) asks for the number left out of each analysis, and why (both from
            // memory).
            itt_denominator: "Modified intention to treat: everyone enrolled who has a \
                              baseline weight (started). Someone enrolled without any weigh-in \
                              has no baseline, so no change can be measured or carried forward \
                              for them: they are outside the weight-change and milestone \
                              figures, and their number is the enrolment table's “Enrolled \
                              without a baseline weight”, shown or hidden by the same \
                              small-cell rules as every count."
                .into(),
            // CONSORT 2010 flow diagram (Schulz KF et al., BMJ 2010;340:c332): of those
            // allocated, "discontinued intervention" and "lost to follow-up" are counted apart.
            retention: "Retention: of those who started, the share still in the program at the \
                        period's end (not withdrawn), as a participant flow counts it; a \
                        withdrawal lowers it even when the person weighed in before leaving. \
                        The share with a weight at the time point (a weigh-in in the period's \
                        last 4 weeks) is given apart: it says how complete the outcome data \
                        are, not how many stayed."
                .into(),
            // ICH E9(R1) (2019), treatment-policy strategy: measurements after stopping
            // treatment are used; data after withdrawal of consent are not. CONSORT 2010 flow
            // diagram: "discontinued intervention" apart from those analysed.
            withdrawal: "Withdrawal: for someone who withdrew consent to the use of their data \
                         (the default), weigh-ins and logs dated after the withdrawal day are \
                         not used in any figure, the intention-to-treat weight change included; \
                         if they withdrew more than 4 weeks before the period's end they have \
                         no weight at the time point and count as no change (baseline carried \
                         forward). For someone recorded as having only stopped the program, \
                         their weigh-ins after that day are used as follow-up, as an \
                         intention-to-treat analysis under the treatment-policy strategy does: \
                         a follow-up weigh-in in the period's last 4 weeks gives them a weight \
                         at the time point. Their food and activity logs after that day are \
                         not used, and they count as discontinued, not retained."
                .into(),
            weights: "Baseline: each participant's first weigh-in on or after enrolment (the \
                      mean of that day's weigh-ins, moved onto the later level when the \
                      weigh-ins have a step such as a new scale). Weight at the time point (the period's \
                      end): the smoothed trend weight at the last weigh-in, counted only when \
                      that weigh-in lies in the last 4 weeks of the period; otherwise the \
                      weight at the time point is missing."
                .into(),
            bocf: "Primary: a missing weight at the time point is replaced by the baseline \
                   weight (no change counted), which assumes no benefit."
                .into(),
            locf: "Sensitivity: a missing weight at the time point is replaced by the trend \
                   weight at the last weigh-in (the baseline if there is none)."
                .into(),
            completers: "Completers: only participants with a weight at the time point; this \
                         tends to overstate success."
                .into(),
            trajectory: "Weekly trajectory: weeks are counted from each participant's \
                         enrolment (week 0 is the enrolment day and the six days after it); a \
                         participant's value for a week is the change of their smoothed trend \
                         weight on the week's last day from their baseline weight, in % of the \
                         baseline, up to the period's end, and a week's mean is over the \
                         participants who started and have a trend weight that day (those still \
                         weighing in: not intention-to-treat). Each participant's values are in \
                         the program staff's tidy metrics (metrics/tables.csv, the outcomes \
                         module's trajectory table; identified: not for the sponsor)."
                .into(),
            // Common practice: a weekly figure covers a week. Scaled to 7 days, someone with
            // 2 days in the period added "7.0 days with a weigh-in" or "210 minutes" (two
            // 30-minute walks) to these medians.
            adherence: "Adherence medians: each participant's rate per week over their days in \
                        the period (from enrolment or the period's start to its end or the day \
                        they left). Someone with fewer than 7 such days has no rate per week and \
                        is left out of the activity, weigh-in and food-log medians; n counts \
                        those with a rate, and is shown or hidden by the same small-cell rules \
                        as every count. Session attendance is over every session offered since \
                        enrolment."
                .into(),
            mean_interval: format!("{c:.0} % interval for a mean: Student t (mean ± t × SE)."),
            median_interval: format!(
                "{c:.0} % interval for a median: distribution-free, from order statistics and \
                 the binomial distribution (Conover, Practical Nonparametric Statistics); its \
                 limits are rounded outward to 0.5, the median to the nearest 0.5."
            ),
            proportion_interval: format!(
                "{c:.0} % interval for a share: Wilson score interval (Wilson 1927)."
            ),
            suppression: format!(
                "No count from 1 to {} is shown; 0 is shown, except among a group whose own count \
                 is hidden. Further cells are hidden so that \
                 no hidden count can be worked out from the shown ones, and a share, mean or \
                 interval is hidden when a count it rests on is hidden. In the weekly \
                 trajectory, n is exact while everyone who started is still weighing in; after \
                 that it is given only as the range the rule itself implies ({min} to one fewer \
                 than the number started), so that no two weeks' or months' n can be subtracted \
                 to count the few who stopped in between, and it is left out where, set against the other \
                 groups' ranges, it would still narrow such a number; a week's mean needs at \
                 least {min} people.",
                min.saturating_sub(1)
            ),
            small_groups: format!(
                "A group with fewer than {min} participants who started is not shown on its \
                 own, nor named; such groups are reported together as one combined group (with \
                 the next-smallest group added if needed to reach {min})."
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
    /// Number of participants with at least one clinician-review flag (people, not flags: one
    /// person with two lab values in range counts once; a count only).
    pub with_clinician_review_flag: Shown<u64>,
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
    /// Share of those started with a weight at the time point, % = with outcome / started ×
    /// 100 (completeness of the outcome data; not retention).
    pub with_outcome_percent: Shown<f64>,
    /// Started and not withdrawn by the period's end (still in the program).
    pub retained: Shown<u64>,
    /// Started and withdrawn on or before the period's end (discontinued; CONSORT 2010).
    pub discontinued: Shown<u64>,
    /// Retention, % = retained / started × 100: the share of those who started who are still
    /// in the program (CONSORT 2010 participant flow; Schulz KF et al., *BMJ* 2010;340:c332).
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
    /// Session attendance since enrolment, %: each participant's adherence
    /// `attendance_to_date_percent`, and so named in `group.json` (as `attendance_percent` it
    /// read as the period's figure, the column of that name in participants.csv).
    #[serde(rename = "attendance_to_date_percent")]
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
    AdherenceN(usize),
    PlateauWithVerdict,
    PlateauYes,
    PlateauNo,
    PlateauInsufficient,
    Flagged,
    Retained,
    Discontinued,
}

impl Kind {
    /// Plain name of the count, for the audit notes.
    fn name(self) -> String {
        match self {
            Kind::Enrolled => "enrolled".into(),
            Kind::Active => "active".into(),
            Kind::Withdrawn => "withdrawn".into(),
            Kind::Started => "started".into(),
            Kind::NotStarted => "not started".into(),
            Kind::WithOutcome => "with a recent weigh-in".into(),
            Kind::WithoutOutcome => "without a recent weigh-in".into(),
            Kind::Retained => "started and still in the program".into(),
            Kind::Discontinued => "started and withdrew".into(),
            Kind::Reached(i) => format!("reached {} % loss", MILESTONE_LOSS_PERCENT[i]),
            Kind::NotReached(i) => format!("did not reach {} % loss", MILESTONE_LOSS_PERCENT[i]),
            Kind::Bin(i) => format!("change {}", BINS[i].0),
            Kind::AdherenceN(i) => format!("with adherence measure {}", i + 1),
            Kind::PlateauWithVerdict => "with a plateau verdict".into(),
            Kind::PlateauYes => "on a plateau".into(),
            Kind::PlateauNo => "not on a plateau".into(),
            Kind::PlateauInsufficient => "too little data for a plateau verdict".into(),
            Kind::Flagged => "with a clinician-review flag".into(),
        }
    }

    /// The count as the audit notes name it to the report's reader. `name` stays the key of
    /// the figure's family across releases (earlier ledgers hold it), and for the adherence
    /// counts it was "with adherence measure 2", which no reader of the report could place.
    fn label(self) -> String {
        match self {
            Kind::AdherenceN(i) => format!(
                "the n of {}",
                [
                    "activity minutes per week",
                    "days with a weigh-in per week",
                    "food-log days per week",
                    "session attendance",
                ]
                .get(i)
                .copied()
                .unwrap_or("an adherence measure")
            ),
            _ => self.name(),
        }
    }

    /// The count of the people this count is a share of, in the same section: a 0 here is
    /// hidden when that count is hidden as small (`CellTable::set_group`). "0 not on a
    /// plateau" beside a hidden "with a plateau verdict" of 10 told the sponsor that every one
    /// of those 10 people was on a plateau. A section's number started is at least min, so
    /// today only the plateau verdicts' group can be small; the rest are set so the rule holds
    /// wherever a group is.
    fn group(self) -> Option<Kind> {
        match self {
            Kind::Enrolled => None,
            Kind::Active
            | Kind::Withdrawn
            | Kind::Started
            | Kind::NotStarted
            | Kind::AdherenceN(_)
            | Kind::PlateauWithVerdict
            | Kind::PlateauInsufficient
            | Kind::Flagged => Some(Kind::Enrolled),
            Kind::WithOutcome
            | Kind::WithoutOutcome
            | Kind::Retained
            | Kind::Discontinued
            | Kind::Reached(_)
            | Kind::NotReached(_)
            | Kind::Bin(_) => Some(Kind::Started),
            Kind::PlateauYes | Kind::PlateauNo => Some(Kind::PlateauWithVerdict),
        }
    }

    /// Complement choice rank: lower is hidden first, so that the denominators of the
    /// analyses (started, with outcome) survive whenever another cell can protect instead.
    fn priority(self) -> u8 {
        match self {
            Kind::NotStarted | Kind::WithoutOutcome | Kind::NotReached(_) => 0,
            Kind::Discontinued => 0,
            Kind::PlateauInsufficient => 0,
            Kind::Active | Kind::Withdrawn | Kind::Bin(_) | Kind::Flagged => 1,
            Kind::PlateauYes | Kind::PlateauNo => 1,
            Kind::Reached(_) | Kind::AdherenceN(_) | Kind::Retained => 2,
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
    /// Who is counted in each cell (indices into the enrolled rows), for the audit across
    /// releases.
    members: BTreeMap<Kind, Vec<usize>>,
    /// Person of each completer value (aligned with `comp_pct`).
    comp_idx: Vec<usize>,
    /// Started without an outcome: (person, LOCF % change, LOCF kg change).
    locf_only: Vec<(usize, f64, f64)>,
    /// Person of each week value (aligned with `weeks`).
    week_idx: BTreeMap<u32, Vec<usize>>,
    /// Every enrolled person with how many weeks since enrolment end in the period, and as
    /// many less those after their withdrawal (`u32::MAX` when not known): who could have a
    /// value in a week, by dates alone.
    reach: Vec<(usize, u32, u32)>,
}

impl Raw {
    fn count(&self, k: Kind) -> u64 {
        self.counts.get(&k).copied().unwrap_or(0)
    }

    /// Who could have a value in week `w`, by the dates a reader may know (person tokens):
    /// those with the week in the period, and of them those who had not withdrawn before it.
    fn week_open(&self, w: u32, tokens: &[u64]) -> [BTreeSet<u64>; 2] {
        let pick = |kept: bool| {
            self.reach
                .iter()
                .filter(|&&(_, open, left)| if kept { left > w } else { open > w })
                .map(|&(i, _, _)| tokens[i])
                .collect()
        };
        [pick(false), pick(true)]
    }

    /// The person tokens (`tokens`, one per enrolled row) of those with a value in week `w`.
    fn week_people(&self, w: u32, tokens: &[u64]) -> BTreeSet<u64> {
        self.week_idx
            .get(&w)
            .into_iter()
            .flatten()
            .map(|&i| tokens[i])
            .collect()
    }
}

fn is_started(r: &ParticipantSummary) -> bool {
    r.started && r.baseline_kg.is_some_and(|b| b.is_finite() && b > 0.0)
}

/// Index of a row among the enrolled rows, by address (rows are borrowed from one slice).
type RowIndex = HashMap<*const ParticipantSummary, usize>;

fn raw_section(rows: &[&ParticipantSummary], index: &RowIndex) -> Raw {
    let mut raw = Raw::default();
    let mut counts: BTreeMap<Kind, u64> = BTreeMap::new();
    let mut members: BTreeMap<Kind, Vec<usize>> = BTreeMap::new();
    let mut inc = |k: Kind, who: usize| {
        *counts.entry(k).or_insert(0) += 1;
        members.entry(k).or_default().push(who);
    };
    for r in rows {
        let who = index[&(*r as *const ParticipantSummary)];
        let mut inc = |k: Kind| inc(k, who);
        let open = r.weeks_in_period.unwrap_or(u32::MAX);
        let left = r
            .withdrew_week
            .map_or(open, |w| open.min(w.saturating_add(1)));
        raw.reach.push((who, open, left));
        // People, like every other count: the sponsor reads it as people, and the audit
        // protects it as the set of people it is.
        if r.clinical_flags > 0 {
            inc(Kind::Flagged);
        }
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
        inc(if r.withdrawn {
            Kind::Discontinued
        } else {
            Kind::Retained
        });
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
            raw.comp_idx.push(who);
        } else {
            inc(Kind::WithoutOutcome);
            raw.locf_only.push((who, pct(locf), locf - b));
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
            raw.week_idx.entry(w).or_default().push(who);
        }
    }
    counts.entry(Kind::Flagged).or_insert(0);
    raw.counts = counts;
    raw.members = members;
    raw
}

/// The kinds every section registers as cells. The weekly trajectory's counts are not cells:
/// see [`week_count`].
fn all_kinds() -> Vec<Kind> {
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
    k.extend((0..4).map(Kind::AdherenceN));
    k.extend([
        Kind::PlateauWithVerdict,
        Kind::PlateauYes,
        Kind::PlateauNo,
        Kind::PlateauInsufficient,
        Kind::Flagged,
        Kind::Retained,
        Kind::Discontinued,
    ]);
    k
}

/// The additive relations inside one section, as (total, parts).
fn section_relations() -> Vec<(Kind, Vec<Kind>)> {
    let mut r = vec![
        (Kind::Enrolled, vec![Kind::Active, Kind::Withdrawn]),
        (Kind::Enrolled, vec![Kind::Started, Kind::NotStarted]),
        (Kind::Started, vec![Kind::WithOutcome, Kind::WithoutOutcome]),
        (Kind::Started, vec![Kind::Retained, Kind::Discontinued]),
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

/// Whether a section's people now (`now`, in the order of `prior`'s sets) differ by 1 … min − 1
/// from those an earlier figure was printed with (`prior`: indices into `history.scopes`; none
/// for a figure of an older ledger).
fn moved(prior: &[usize], now: &[BTreeSet<u64>], history: &History, min: u32) -> bool {
    prior.iter().zip(now).any(|(&i, now)| {
        let Some(then) = history.scopes.get(i) else {
            return false;
        };
        let gone = then.iter().filter(|p| !now.contains(p)).count();
        let came = now
            .iter()
            .filter(|p| then.binary_search(p).is_err())
            .count();
        let diff = gone + came;
        diff > 0 && diff < min as usize
    })
}

/// The index of a set of people in `published.scopes`, added once.
fn intern(
    published: &mut Published,
    scope_at: &mut HashMap<Vec<u64>, usize>,
    people: BTreeSet<u64>,
) -> usize {
    let people: Vec<u64> = people.into_iter().collect();
    *scope_at.entry(people.clone()).or_insert_with(|| {
        published.scopes.push(people);
        published.scopes.len() - 1
    })
}

fn withheld_note(min: u32) -> String {
    format!("fewer than {min} participants — withheld")
}

/// Builds the group report (see the module documentation for every definition), with no
/// earlier releases to audit against.
pub fn summarize(rows: &[ParticipantSummary], opts: &GroupOptions) -> GroupReport {
    build(rows, opts, true, &History::default()).0
}

/// Builds the group report audited together with what earlier releases published, and
/// returns what this one publishes (for the ledger).
pub fn summarize_release(
    rows: &[ParticipantSummary],
    opts: &GroupOptions,
    history: &History,
) -> (GroupReport, Published) {
    build(rows, opts, true, history)
}

/// `suppress = false` gives the same structure with every cell shown: the truth the
/// suppression tests compare against.
pub(super) fn build(
    rows: &[ParticipantSummary],
    opts: &GroupOptions,
    suppress: bool,
    history: &History,
) -> (GroupReport, Published) {
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
    let index: RowIndex = enrolled
        .iter()
        .enumerate()
        .map(|(i, r)| (*r as *const ParticipantSummary, i))
        .collect();
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
        raw: (!program_small).then(|| raw_section(&enrolled, &index)),
        cells: BTreeMap::new(),
    };

    // Sections of each split, with the merge rule for small groups.
    let mut splits: Vec<(String, Vec<Draft>, Option<String>)> = Vec::new();
    for key in &opts.group_by {
        // Values written with other case or spacing (`North Plant`, `north  plant`) are one
        // group, shown as its most common spelling (spaces collapsed; of equally common ones,
        // the first in sort order): split by the exact text, one site was shown as two, each
        // with part of its people. (The audit links figures by who they count, not by label.)
        let spaced = |v: &str| v.split_whitespace().collect::<Vec<_>>().join(" ");
        // Compared in the form a reader cannot tell apart (`crate::text::fold_for_comparison`:
        // also a zero-width space pasted with the value, or full-width letters, which made
        // one site two sections with the same visible title).
        let fold = crate::text::fold_for_comparison;
        let mut spellings: BTreeMap<String, BTreeMap<String, usize>> = BTreeMap::new();
        for v in enrolled.iter().filter_map(|r| r.groups.get(key)) {
            let written = spaced(v);
            *spellings
                .entry(fold(&written))
                .or_default()
                .entry(written)
                .or_default() += 1;
        }
        let spelling: BTreeMap<String, String> = spellings
            .into_iter()
            .map(|(folded, counts)| {
                let mut best: Option<(&String, usize)> = None;
                for (w, &n) in &counts {
                    if best.is_none_or(|(_, m)| n > m) {
                        best = Some((w, n));
                    }
                }
                let shown = best.map(|(w, _)| w.clone()).unwrap_or_default();
                (folded, shown)
            })
            .collect();
        let mut by_value: BTreeMap<Option<String>, Vec<&ParticipantSummary>> = BTreeMap::new();
        for r in &enrolled {
            by_value
                .entry(
                    r.groups
                        .get(key)
                        .map(|v| spelling[&fold(&spaced(v))].clone())
                        // An empty value (`site: ""`, or only a zero-width space) is not
                        // recorded, not a group named "".
                        .filter(|v| !fold(v).is_empty()),
                )
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
            if small {
                // A small group is neither shown nor named: its heading alone ("Site: Executive
                // suite — withheld") told the sponsor that someone there takes part, and a
                // group value may be a person's name.
                continue;
            }
            let withheld = if !is_merged {
                None
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
                raw: (!is_merged).then(|| raw_section(rs, &index)),
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
                // Only the groups large enough to be named; the small ones stay unnamed.
                members: merged
                    .iter()
                    .filter(|v| started_of(&by_value[*v]) >= min64)
                    .map(label_of)
                    .collect(),
                combined_into: None,
                withheld: None,
                raw: Some(raw_section(&rs, &index)),
                cells: BTreeMap::new(),
            });
        }
        splits.push((key.clone(), drafts, note));
    }

    // Cells and relations.
    let kinds = all_kinds();
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
            for &k in &kinds {
                if let Some(g) = k.group() {
                    table.set_group(d.cells[&k], d.cells[&g]);
                }
            }
        }
    };
    register(&mut program, 1, &mut table);
    // Enrolment and the analyses' denominators (started, with a recent weigh-in).
    table.set_headline_rank(Kind::Enrolled.priority() * 2);
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
    // Person tokens: stable across releases when the history carries a secret key.
    let tokens: Vec<u64> = enrolled
        .iter()
        .enumerate()
        .map(|(i, r)| person_token(history.secret.as_ref(), r.pseudonym, i))
        .collect();
    let mut ranges: Vec<Option<(u64, u64)>> = Vec::new();
    let mut audit_notes: Vec<AuditNote> = Vec::new();
    let mut published = Published::default();
    let mut withdrawn: HashMap<*const Draft, BTreeSet<Line>> = HashMap::new();
    // Where each shown section's week sum went in `published.sums`, by (section, week): a
    // week mean the weighted-mean audit withholds afterwards is taken out again.
    let mut week_sum_at: HashMap<(*const Draft, u32), usize> = HashMap::new();
    // Where each set of people recorded with a count or a sum is in `published.scopes`.
    let mut scope_at: HashMap<Vec<u64>, usize> = HashMap::new();
    // Week means withheld because who could have a value in them changed by a few people
    // since a release printed them (see the sum audit below).
    let mut forced_weeks: HashMap<*const Draft, BTreeSet<u32>> = HashMap::new();
    // The people of every sum earlier releases printed (the ledger's), for
    // [`audit_week_means`]: a section's week whose people were summed before may be known.
    // The week means earlier releases printed, each with who could have had a value in it
    // (by dates): a section's week is taken as printed before when one of the same week was
    // printed over the same such people, a test that rests on nothing the report hides (who
    // has a value does). Sums of an older ledger carry no such people; while it holds any, a
    // week whose people, as they are, were summed before counts as printed too.
    let weeks_printed: HashSet<(String, Vec<u64>, Vec<u64>)> = history
        .sum_labels
        .iter()
        .zip(&history.sum_scopes)
        .filter_map(|(label, ix)| match ix.as_slice() {
            [a, b] => Some((
                label.clone(),
                history.scopes.get(*a)?.clone(),
                history.scopes.get(*b)?.clone(),
            )),
            _ => None,
        })
        .collect();
    let legacy = history.sum_scopes.len() < history.sums.len()
        || history.sum_scopes.iter().any(Vec::is_empty);
    let printed_before: HashSet<BTreeSet<u64>> = history
        .sums
        .iter()
        .map(|s| s.iter().map(|&(p, _)| p).collect())
        .collect();
    // What a reader knows of each shown section's weekly n before it is printed (in the order
    // of `weeks`), once the counts are settled.
    let mut week_bounds: HashMap<*const Draft, Vec<WeekBounds>> = HashMap::new();
    if suppress {
        let drafts_of = || {
            std::iter::once(&program)
                .chain(splits.iter().flat_map(|(_, ds, _)| ds.iter()))
                .filter(|d| d.shown() && d.raw.is_some())
        };
        // Counts: cell suppression and the interval audit within this release, then the
        // differences with every count published before, then the audit of each figure's
        // family across releases; repeated until nothing changes.
        let prior_counts: BTreeSet<BTreeSet<u64>> = history
            .counts
            .iter()
            .map(|c| c.iter().copied().collect())
            .collect();
        // Where each earlier count was printed: the people of its section (enrolled, started).
        let mut scopes_of_prior: HashMap<BTreeSet<u64>, Vec<&Vec<usize>>> = HashMap::new();
        for (set, ix) in history.counts.iter().zip(&history.count_scopes) {
            scopes_of_prior
                .entry(set.iter().copied().collect())
                .or_default()
                .push(ix);
        }
        let members_of = |raw: &Raw, k: Kind| -> BTreeSet<u64> {
            raw.members
                .get(&k)
                .map(|m| m.iter().map(|&i| tokens[i]).collect())
                .unwrap_or_default()
        };
        link_nested_counts(&mut table, drafts_of(), enrolled.len(), min);
        // The whole program's headline counts: hidden against an earlier release, each is
        // printed as its band (see `headline_band`) unless the band narrows something.
        let headline: BTreeSet<CellId> = HEADLINE_KINDS
            .iter()
            .filter_map(|k| program.cells.get(k).copied())
            .collect();
        let band_it = |table: &mut CellTable, c: CellId| {
            if headline.contains(&c) {
                let (lo, hi) = headline_band(table.value(c), min);
                table.set_band(c, lo, hi);
            } else {
                table.force_hide(c);
            }
        };
        let mut no_range: BTreeSet<CellId> = BTreeSet::new();
        // The notes that say "Shown only as a range", with their cells: a count hidden against
        // an earlier release can end with no range at all (hidden further, or its range
        // dropped), and the note must then not say it is shown as one.
        let mut ranged_notes: Vec<(usize, CellId)> = Vec::new();
        let mut budget = venn::Caps::default().max_solves;
        let mut gave_up: BTreeSet<String> = BTreeSet::new();
        loop {
            ranges = table.apply_with_ranges(min);
            if table.exhausted() {
                // Every count is hidden and nothing later can show one again.
                tracing::warn!(
                    "group report: the small-cell check of the counts reached its work limit \
                     (the groups are split too finely); every count in the group report is \
                     withheld"
                );
                audit_notes.push(AuditNote {
                    section: program.label.clone(),
                    figure: "every count".into(),
                    rule: "Withheld: the groups are split so finely that the check that no \
                           small group's count can be worked out from the others could not \
                           finish within its work limit; report fewer or larger groups \
                           (fewer group_by keys) to see figures"
                        .into(),
                });
                break;
            }
            for &c in &no_range {
                ranges[c] = None;
            }
            let mut changed = false;
            for d in drafts_of() {
                let raw = d.raw.as_ref().expect("filtered");
                for (&k, &c) in &d.cells {
                    if table.is_suppressed(c) {
                        continue;
                    }
                    let set = members_of(raw, k);
                    let isolates = |p: &BTreeSet<u64>| {
                        let diff = p.symmetric_difference(&set).count();
                        diff > 0 && diff < min as usize
                    };
                    // A count over exactly a set published before repeats it: nothing new,
                    // unless its section has since gained or lost 1 … min − 1 people (joined,
                    // left, moved site, started): beside the earlier count, the same number
                    // says that none of them is counted in it, a 0 among a small group the
                    // sponsor can name (an 80-person demo re-issued without one person printed
                    // "did not reach 3 %" 23 and "reached 5 %" 31 again: that person had
                    // reached 3 % but not 5 %).
                    let scope_moved = || {
                        let now = [
                            members_of(raw, Kind::Enrolled),
                            members_of(raw, Kind::Started),
                        ];
                        scopes_of_prior
                            .get(&set)
                            .is_some_and(|all| all.iter().any(|ix| moved(ix, &now, history, min)))
                    };
                    let repeat = prior_counts.contains(&set);
                    // One note for both reasons: a note of its own would say that the count is
                    // the earlier one's, and so give its number.
                    if !set.is_empty()
                        && if repeat {
                            scope_moved()
                        } else {
                            prior_counts.iter().any(isolates)
                        }
                    {
                        band_it(&mut table, c);
                        changed = true;
                        ranged_notes.push((audit_notes.len(), c));
                        audit_notes.push(AuditNote {
                            section: d.label.clone(),
                            figure: k.label(),
                            rule: format!(
                                "Shown only as a range, because subtracted from a count in an \
                                 earlier report it would give the number of fewer than {min} \
                                 people"
                            ),
                        });
                    }
                }
            }
            if changed {
                continue;
            }
            // Every figure's family across releases (see `venn`), and within this one: the
            // sections of two splits cut each other into site-and-team groups that no relation
            // of the suppression names. Sites A, B, C, D and teams X, Y, Z in a chain (A all in
            // X, X also in B, B also in Y, Y also in C …) printed every enrolled count, and B's
            // people in team Y, 3 of them, were B − (X − A) = 15 − (24 − 12).
            let mut families: BTreeMap<String, Vec<venn::FamilySet>> = BTreeMap::new();
            let mut where_is: HashMap<CellId, (String, Kind)> = HashMap::new();
            for d in drafts_of() {
                let raw = d.raw.as_ref().expect("filtered");
                for (&k, &c) in &d.cells {
                    let bound = if !table.is_suppressed(c) {
                        venn::Bound::Exact(raw.count(k))
                    } else if let Some((lo, hi)) = ranges[c] {
                        venn::Bound::Range(lo, hi)
                    } else {
                        continue;
                    };
                    where_is.insert(c, (d.label.clone(), k));
                    families.entry(k.name()).or_default().push(venn::FamilySet {
                        people: members_of(raw, k).into_iter().collect(),
                        bound,
                        current: Some(c),
                    });
                }
            }
            // Earlier releases' counts join the family of the same name (a release from before
            // labels, every family). Sets labelled "clinician-review flags" (releases that
            // printed the number of flags, not of people) join none: their printed figure was
            // not the size of the set.
            for (name, family) in &mut families {
                let mut seen: BTreeSet<&Vec<u64>> = BTreeSet::new();
                for (set, label) in history.counts.iter().zip(
                    history
                        .count_labels
                        .iter()
                        .map(String::as_str)
                        .chain(std::iter::repeat("")),
                ) {
                    if (label == name || label.is_empty()) && seen.insert(set) {
                        family.push(venn::FamilySet {
                            people: set.clone(),
                            bound: venn::Bound::Exact(set.len() as u64),
                            current: None,
                        });
                    }
                }
            }
            let caps = venn::Caps::default();
            for (name, family) in &families {
                if gave_up.contains(name) {
                    continue;
                }
                match venn::audit(family, min, &caps, &mut budget) {
                    venn::Outcome::Clean => {}
                    venn::Outcome::Leaks(leaks) => {
                        for leak in leaks {
                            let shown: Vec<CellId> = leak
                                .blame
                                .iter()
                                .copied()
                                .filter(|&c| !table.is_suppressed(c))
                                .collect();
                            let hide = shown.iter().copied().min_by_key(|&c| {
                                let touching = leak.blame.iter().position(|&b| b == c);
                                (table.priority(c), touching)
                            });
                            if let Some(c) = hide {
                                band_it(&mut table, c);
                                changed = true;
                                let (section, k) = where_is[&c].clone();
                                ranged_notes.push((audit_notes.len(), c));
                                audit_notes.push(AuditNote {
                                    section,
                                    figure: k.label(),
                                    rule: format!(
                                        "Shown only as a range, because combined with other \
                                         counts of this report or of earlier reports it would give \
                                         the number of fewer than {min} people"
                                    ),
                                });
                            } else if let Some(&c) =
                                leak.blame.iter().find(|c| !no_range.contains(c))
                            {
                                no_range.insert(c);
                                table.drop_band(c);
                                changed = true;
                                let (section, k) = where_is[&c].clone();
                                audit_notes.push(AuditNote {
                                    section,
                                    figure: k.label(),
                                    rule: format!(
                                        "Not shown, not even as a range, because combined with \
                                         other counts of this report or of earlier reports the \
                                         range would give the number of fewer than {min} people"
                                    ),
                                });
                            }
                            if changed {
                                // One change per family and pass: the next pass re-audits.
                                break;
                            }
                        }
                    }
                    venn::Outcome::GaveUp(why) => {
                        // Fail safe: publish nothing new from this family.
                        gave_up.insert(name.clone());
                        for s in family {
                            let Some(c) = s.current else { continue };
                            let repeat = prior_counts.contains(&s.people.iter().copied().collect());
                            if !table.is_suppressed(c) && !repeat {
                                table.force_hide(c);
                                changed = true;
                            }
                            if table.is_suppressed(c) {
                                no_range.insert(c);
                                table.drop_band(c);
                                changed = true;
                            }
                            let (section, k) = where_is[&c].clone();
                            audit_notes.push(AuditNote {
                                section,
                                figure: k.label(),
                                rule: format!(
                                    "Not shown: the audit against earlier reports stopped at \
                                     its work limit ({why}), and what it could not check is \
                                     not published"
                                ),
                            });
                        }
                    }
                }
            }
            if !changed {
                break;
            }
        }
        for (i, c) in ranged_notes {
            if ranges.get(c).copied().flatten().is_none() {
                let rule = &mut audit_notes[i].rule;
                if let Some(rest) = rule.strip_prefix("Shown only as a range, ") {
                    *rule = format!("Not shown, {rest}");
                }
            }
        }
        for d in drafts_of() {
            let raw = d.raw.as_ref().expect("filtered");
            let started =
                (!table.is_suppressed(d.cells[&Kind::Started])).then(|| raw.count(Kind::Started));
            let bounds = weeks
                .iter()
                .map(|w| {
                    let mut b = WeekBounds::open(started, raw.count(Kind::Enrolled));
                    let set = raw.week_people(*w, &tokens);
                    for p in &prior_counts {
                        if set.is_subset(p) {
                            b.hi = b.hi.min(p.len() as u64 - u64::from(set.len() < p.len()));
                        }
                        if p.is_subset(&set) {
                            b.lo = b.lo.max(p.len() as u64 + u64::from(p.len() < set.len()));
                        }
                    }
                    b
                })
                .collect();
            week_bounds.insert(d as *const Draft, bounds);
        }
        // Sums: every mean shown with its n, audited with the sums published before. The
        // adherence medians go through the same audit as if each were the sum of the values
        // it was taken over: a median printed again over the same people after a few of their
        // values changed (a re-run after one file was fixed), or over people differing by a
        // few, moves only with those few people's values, and so shows what they did, as the
        // difference of two such sums would (their atoms, tagged apart, never meet a mean's).
        let mut facts: Vec<audit::SumFact> = Vec::new();
        let mut person_of: HashMap<u64, u64> = HashMap::new();
        let orders_before: HashSet<BTreeSet<u64>> = history
            .orders
            .iter()
            .map(|s| s.iter().map(|&(_, a)| a).collect())
            .collect();
        for s in history.sums.iter().chain(&history.orders) {
            for &(p, a) in s {
                person_of.insert(a, p);
            }
            facts.push(audit::SumFact {
                atoms: s.iter().map(|&(_, a)| a).collect(),
                removable: false,
                priority: 0,
            });
        }
        // Who could have had a value in each week mean printed before, by the mean's figure
        // (its week), whatever the section.
        let mut weeks_before: HashMap<&str, Vec<&Vec<usize>>> = HashMap::new();
        for (label, ix) in history.sum_labels.iter().zip(&history.sum_scopes) {
            if !ix.is_empty() {
                weeks_before.entry(label.as_str()).or_default().push(ix);
            }
        }
        // (section, line, label, its (token, atom) changes, who could have had a value in it)
        type Owner = (*const Draft, Line, String, Vec<(u64, u64)>, Vec<usize>);
        let mut owners: Vec<Owner> = Vec::new();
        for d in drafts_of() {
            let raw = d.raw.as_ref().expect("filtered");
            let shown = |k: Kind| !table.is_suppressed(d.cells[&k]);
            let base = u32::from(d.kind == SectionKind::Program);
            let changes: Vec<(u64, u64)> = raw
                .comp_idx
                .iter()
                .zip(raw.comp_pct.iter().zip(&raw.comp_kg))
                .map(|(&i, (&p, &k))| (tokens[i], atom(tokens[i], "change", p, k)))
                .collect();
            type Changes = Vec<(u64, u64)>;
            let mut lines: Vec<(Line, u32, Changes, Vec<usize>)> = Vec::new();
            let here = vec![
                intern(
                    &mut published,
                    &mut scope_at,
                    members_of(raw, Kind::Enrolled),
                ),
                intern(&mut published, &mut scope_at, members_of(raw, Kind::Active)),
            ];
            if shown(Kind::Started) {
                lines.push((Line::Bocf, 6 + base, changes.clone(), here.clone()));
                let mut locf = changes.clone();
                locf.extend(
                    raw.locf_only
                        .iter()
                        .map(|&(i, p, k)| (tokens[i], atom(tokens[i], "change", p, k))),
                );
                lines.push((Line::Locf, base, locf, here.clone()));
            }
            if shown(Kind::WithOutcome) {
                lines.push((Line::Completers, 2 + base, changes, here.clone()));
            }
            let bounds = &week_bounds[&(d as *const Draft)];
            for (wi, &w) in weeks.iter().enumerate() {
                let Some(idx) = raw.week_idx.get(&w) else {
                    continue;
                };
                if week_count(idx.len() as u64, bounds[wi], min).1 {
                    // A week mean printed before over people who could have a value that week
                    // differing from this section's by 1 … min − 1 (someone joined, left, moved
                    // or reached the week since): printed again it would say whether they have
                    // one (the same mean: none). Withheld, whatever their data, so that the
                    // choice tells nothing either ([`audit_week_means`] keeps the split's own
                    // choice beside it).
                    let open = raw.week_open(w, &tokens);
                    let name = Line::Week(w).name();
                    if weeks_before
                        .get(name.as_str())
                        .is_some_and(|all| all.iter().any(|ix| moved(ix, &open, history, min)))
                    {
                        forced_weeks.entry(d as *const Draft).or_default().insert(w);
                        continue;
                    }
                    let [open, kept] = open;
                    let scopes = vec![
                        intern(&mut published, &mut scope_at, open),
                        intern(&mut published, &mut scope_at, kept),
                    ];
                    let vals = &raw.weeks[&w];
                    let atoms = idx
                        .iter()
                        .zip(vals)
                        .map(|(&i, &v)| (tokens[i], atom(tokens[i], "week", f64::from(w), v)))
                        .collect();
                    lines.push((Line::Week(w), 4 + base, atoms, scopes));
                }
            }
            for (i, values) in raw.adherence.iter().enumerate() {
                let k = Kind::AdherenceN(i);
                let who = raw.members.get(&k).map_or(&[][..], Vec::as_slice);
                if shown(k) && !values.is_empty() {
                    let atoms = who
                        .iter()
                        .zip(values)
                        .map(|(&p, &v)| (tokens[p], atom(tokens[p], ADHERENCE_TAGS[i], v, 0.0)))
                        .collect();
                    lines.push((Line::Adherence(i), 1 + base, atoms, Vec::new()));
                }
            }
            for (line, priority, atoms, scopes) in lines {
                for &(p, a) in &atoms {
                    person_of.insert(a, p);
                }
                let keys: BTreeSet<u64> = atoms.iter().map(|&(_, a)| a).collect();
                // A median over exactly the values of one printed before is that median again:
                // it tells nothing new, and withheld it only cost the report (the sample
                // program's September withheld every attendance median, each the same as
                // August's, because August's sites had been withheld against July's).
                let repeat = matches!(line, Line::Adherence(_)) && orders_before.contains(&keys);
                facts.push(audit::SumFact {
                    atoms: keys.into_iter().collect(),
                    removable: !repeat,
                    priority,
                });
                owners.push((d as *const Draft, line, d.label.clone(), atoms, scopes));
            }
        }
        let keep = audit::protect(
            &facts,
            &|a| person_of.get(&a).copied().unwrap_or(a),
            min as usize,
        );
        let first_new = history.sums.len() + history.orders.len();
        for (j, (d, line, label, atoms, scopes)) in owners.into_iter().enumerate() {
            if keep[first_new + j] {
                if let Line::Adherence(_) = line {
                    published.orders.push(atoms);
                } else if !atoms.is_empty() {
                    if let Line::Week(w) = line {
                        week_sum_at.insert((d, w), published.sums.len());
                    }
                    published.sums.push(atoms);
                    published.sum_labels.push(line.name());
                    published.sum_scopes.push(scopes);
                }
            } else {
                let rule = if let Line::Adherence(_) = line {
                    format!(
                        "Not shown, because beside the same median in an earlier report, or in \
                         another section of this one, it would show how the values of fewer \
                         than {min} people moved it"
                    )
                } else {
                    format!(
                        "Not shown, because with other figures of this report or of an earlier \
                         one it would give, by subtraction, the total of fewer than {min} people"
                    )
                };
                audit_notes.push(AuditNote {
                    section: label,
                    figure: line.name(),
                    rule,
                });
                withdrawn.entry(d).or_default().insert(line);
            }
        }
        for d in drafts_of() {
            let raw = d.raw.as_ref().expect("filtered");
            let here = vec![
                intern(
                    &mut published,
                    &mut scope_at,
                    members_of(raw, Kind::Enrolled),
                ),
                intern(
                    &mut published,
                    &mut scope_at,
                    members_of(raw, Kind::Started),
                ),
            ];
            for (&k, &c) in &d.cells {
                let set = members_of(raw, k);
                if !table.is_suppressed(c) && !set.is_empty() {
                    published.counts.push(set.into_iter().collect());
                    published.count_labels.push(k.name());
                    published.count_scopes.push(here.clone());
                }
            }
        }
    }
    let no_lines = BTreeSet::new();
    let no_weeks = BTreeSet::new();
    // Week means the weighted-mean audit withholds ([`audit_week_means`]).
    let mut mean_withheld: Vec<(*const Draft, u32)> = Vec::new();
    let unbanded = if suppress {
        let mut sections: Vec<WeekSection> = Vec::new();
        let mut of_draft: Vec<*const Draft> = Vec::new();
        let mut add = |d: &Draft, sections: &mut Vec<WeekSection>| -> Option<usize> {
            let raw = d.raw.as_ref().filter(|_| d.shown())?;
            let lines = withdrawn.get(&(d as *const Draft));
            let forced = forced_weeks.get(&(d as *const Draft));
            let started = d
                .cells
                .get(&Kind::Started)
                .filter(|&&c| !table.is_suppressed(c))
                .map(|_| raw.count(Kind::Started));
            sections.push(WeekSection {
                started,
                bounds: week_bounds
                    .get(&(d as *const Draft))
                    .cloned()
                    .unwrap_or_else(|| {
                        // Every shown section has bounds once the counts are settled; the same
                        // default as the report's own (`section_stats`).
                        vec![WeekBounds::open(started, raw.count(Kind::Enrolled)); weeks.len()]
                    }),
                enrolled: raw.count(Kind::Enrolled),
                n: weeks
                    .iter()
                    .map(|w| raw.weeks.get(w).map_or(0, |v| v.len() as u64))
                    .collect(),
                withdrawn: weeks
                    .iter()
                    .map(|&w| {
                        lines.is_some_and(|l| l.contains(&Line::Week(w)))
                            || forced.is_some_and(|f| f.contains(&w))
                    })
                    .collect(),
                forced: weeks
                    .iter()
                    .map(|&w| forced.is_some_and(|f| f.contains(&w)))
                    .collect(),

                known: weeks
                    .iter()
                    .map(|&w| {
                        let [open, kept] = raw.week_open(w, &tokens);
                        let key = (
                            Line::Week(w).name(),
                            open.into_iter().collect(),
                            kept.into_iter().collect(),
                        );
                        weeks_printed.contains(&key) || {
                            let people = raw.week_people(w, &tokens);
                            legacy && !people.is_empty() && printed_before.contains(&people)
                        }
                    })
                    .collect(),
                mean: weeks
                    .iter()
                    .enumerate()
                    .map(|(wi, &w)| {
                        let vals = raw.weeks.get(&w)?;
                        let b = week_bounds
                            .get(&(d as *const Draft))
                            .and_then(|v| v.get(wi).copied())
                            .unwrap_or_else(|| {
                                WeekBounds::open(started, raw.count(Kind::Enrolled))
                            });
                        let shown = week_count(vals.len() as u64, b, min).1
                            && !lines.is_some_and(|l| l.contains(&Line::Week(w)));
                        shown
                            .then(|| stats::mean(vals).map(|v| round_to(v, MEAN_STEP)))
                            .flatten()
                    })
                    .collect(),
            });
            of_draft.push(d as *const Draft);
            Some(sections.len() - 1)
        };
        let mut parts: Vec<Vec<usize>> = Vec::new();
        if add(&program, &mut sections).is_some() {
            for (_, drafts, _) in &splits {
                let ids: Vec<usize> = drafts
                    .iter()
                    .filter_map(|d| add(d, &mut sections))
                    .collect();
                parts.push(ids);
            }
        }
        let dropped = audit_week_bands(&sections, &parts, min);
        for (i, wi) in audit_week_means(&sections, &parts, &dropped, min) {
            let w = *weeks.iter().nth(wi).expect("week index");
            mean_withheld.push((of_draft[i], w));
        }
        let mut by_draft: HashMap<*const Draft, BTreeSet<u32>> = HashMap::new();
        for (i, wi) in dropped {
            let w = *weeks.iter().nth(wi).expect("week index");
            by_draft.entry(of_draft[i]).or_default().insert(w);
        }
        by_draft
    } else {
        HashMap::new()
    };

    // A withheld week mean is not published: the ledger must not count it as known (the
    // audit's choice of which mean to withhold next time rests on what was printed).
    let unpublished: BTreeSet<usize> = mean_withheld
        .iter()
        .filter_map(|key| week_sum_at.get(key).copied())
        .collect();
    if !unpublished.is_empty() {
        fn drop_at<T>(v: &mut Vec<T>, gone: &BTreeSet<usize>) {
            *v = std::mem::take(v)
                .into_iter()
                .enumerate()
                .filter(|(i, _)| !gone.contains(i))
                .map(|(_, s)| s)
                .collect();
        }
        drop_at(&mut published.sums, &unpublished);
        drop_at(&mut published.sum_labels, &unpublished);
        drop_at(&mut published.sum_scopes, &unpublished);
    }
    let mut forced_list: Vec<(*const Draft, u32)> = forced_weeks
        .iter()
        .flat_map(|(&d, ws)| ws.iter().map(move |&w| (d, w)))
        .collect();
    // Every section in report order (the whole program, then each split's).
    let sections =
        || std::iter::once(&program).chain(splits.iter().flat_map(|(_, drafts, _)| drafts.iter()));
    let section = |d: *const Draft| {
        sections()
            .find(|x| std::ptr::eq(*x, d))
            .expect("a shown section")
    };
    forced_list.sort_by_key(|&(d, w)| (sections().position(|x| std::ptr::eq(x, d)), w));
    for (d, w) in forced_list {
        let draft = section(d);
        if withdrawn.entry(d).or_default().insert(Line::Week(w)) {
            audit_notes.push(AuditNote {
                section: draft.label.clone(),
                figure: Line::Week(w).name(),
                rule: format!(
                    "Not shown, because the people who could have a value this week (by when \
                     they enrolled and left, and where) differ by fewer than {min} from those of \
                     an earlier report that showed it: shown again, it would tell whether they \
                     have one"
                ),
            });
        }
    }
    for &(d, w) in &mean_withheld {
        let draft = section(d);
        if withdrawn.entry(d).or_default().insert(Line::Week(w)) {
            audit_notes.push(AuditNote {
                section: draft.label.clone(),
                figure: Line::Week(w).name(),
                rule: "Not shown, because with the other sections' means and the whole \
                       program's it could give how many people the week counts where a section \
                       shows that number only as a range, and so how many stopped"
                    .into(),
            });
        }
    }
    let finish = |d: &Draft| Section {
        kind: d.kind.clone(),
        label: d.label.clone(),
        key: d.key.clone(),
        value: d.value.clone(),
        members: d.members.clone(),
        combined_into: d.combined_into.clone(),
        withheld: d.withheld.clone(),
        stats: d.raw.as_ref().filter(|_| d.shown()).map(|raw| {
            let lines = withdrawn.get(&(d as *const Draft)).unwrap_or(&no_lines);
            let unbanded = unbanded.get(&(d as *const Draft)).unwrap_or(&no_weeks);
            let min = if suppress { min } else { 0 };
            let bounds = week_bounds
                .get(&(d as *const Draft))
                .map_or(&[][..], Vec::as_slice);
            section_stats(
                raw, &d.cells, &table, &ranges, lines, &weeks, bounds, unbanded, min, confidence,
            )
        }),
    };
    let report = GroupReport {
        min_cell_size: min,
        confidence,
        methods: Methods::new(min, confidence),
        notes,
        audit: audit_notes,
        releases: Vec::new(),
        program: finish(&program),
        splits: splits
            .iter()
            .map(|(key, drafts, note)| Split {
                key: key.clone(),
                sections: drafts.iter().map(finish).collect(),
                note: note.clone(),
            })
            .collect(),
    };
    (report, published)
}

/// What a reader can know of one section's n in one week before this release prints it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct WeekBounds {
    /// The section's number started, when printed exactly.
    started: Option<u64>,
    /// Bounds from counts printed exactly in earlier releases (the ledger) whose people
    /// contain the week's people (`hi`: their number, less one when they are more) or are
    /// contained in them (`lo`), and from the section's enrolment (`hi`).
    lo: u64,
    hi: u64,
}

impl WeekBounds {
    /// No knowledge beyond the section's enrolment.
    fn open(started: Option<u64>, enrolled: u64) -> Self {
        WeekBounds {
            started,
            lo: 0,
            hi: enrolled,
        }
    }
}

/// How a week of the trajectory prints its number of participants `n`, and whether its mean
/// may be shown at all.
///
/// The weeks' counts fall a few people at a time as people stop weighing in (300, 297, 293,
/// …), so printed exactly, any two of them, or one of them and the number started, give by
/// subtraction how many stopped in between: a count of fewer than `min` people. Protecting
/// each such difference by hiding counts (as the other counts are protected) hid a week count
/// for nearly every week and, through the relations, most of the report: a clean 300-person
/// program showed neither its enrolment nor its weight change. So the weeks' counts are not
/// cells of the suppression at all. A week everyone started reaches prints n exactly (it is the
/// number started). Any other prints only what a reader already knows from the rule: at least
/// `min` (a shown mean says so) and fewer than the number started. Narrower ranges were tried
/// and broken: ranges counted down from each month's growing number started met across months
/// (bands from 30, 46, 60, 69, 81 started pinned 25–26), and cells of a fixed grid were pinned
/// by a one-person change a reader knows of crossing a cell edge (one leaver between months, or
/// two `group_by` keys whose sections differ by one person: "33–35" and "22–32" gave 3 of 36).
/// A range the reader's knowledge leaves at fewer than three values — the number started within
/// `min + 2`, or counts that earlier releases printed exactly of people containing or contained
/// in the week's ([`WeekBounds`]) — would give the shortfall, so there the mean is not shown
/// either (a decision that rests only on those bounds and on n differing from the number
/// started). With the number started hidden, n is not shown and the mean is shown when n ≥ min.
/// The means go through the sum audit like every other mean. `min` 0: no protection (the truth
/// the suppression tests compare against).
fn week_count(n: u64, b: WeekBounds, min: u32) -> (Shown<u64>, bool) {
    if min == 0 {
        return (Shown::Value(n), true);
    }
    let m = u64::from(min);
    if n < m {
        return (Shown::Suppressed, false);
    }
    if b.started == Some(n) {
        return (Shown::Value(n), true);
    }
    let lo = m.max(b.lo);
    let hi = b.started.map_or(b.hi, |s| b.hi.min(s.saturating_sub(1)));
    if hi < lo + 2 || n < lo || n > hi {
        return (Shown::Suppressed, false);
    }
    match b.started {
        Some(s) => (Shown::Range { lo: m, hi: s - 1 }, true),
        None => (Shown::Suppressed, true),
    }
}

/// One shown section's weekly counts, for [`audit_week_bands`].
struct WeekSection {
    /// The number started, when printed exactly.
    started: Option<u64>,
    /// What a reader knows of each week's n before it is printed ([`week_count`]).
    bounds: Vec<WeekBounds>,
    enrolled: u64,
    /// True n of each week (in the order of the report's weeks).
    n: Vec<u64>,
    /// Whether the sum audit withheld each week's mean, or the rule on week means printed
    /// again after who could have a value in them changed (`forced`).
    withdrawn: Vec<bool>,
    /// Whether each week's mean is withheld because who could have a value in it changed by a
    /// few people since a release printed it. `mean` then holds it as if printed: the split's
    /// rule in [`audit_week_means`] applies as without it, and takes another section.
    forced: Vec<bool>,
    /// Each week's mean as printed (rounded to [`MEAN_STEP`]), `None` where it is not printed.
    mean: Vec<Option<f64>>,
    /// Whether an earlier release printed this week's mean over the same people who could
    /// have a value in it (by dates; with an older ledger also: a sum over exactly the week's
    /// people): its mean may be known to the reader. Who has a value is not used: the choice
    /// of the section withheld would tell it.
    known: Vec<bool>,
}

/// The weeks' n that must not be printed although [`week_count`] would print them, as
/// (section, week index) pairs; `sections[0]` is the program, `parts` the sections of each
/// split (each split's shown sections count every enrolled person once).
///
/// Each section's band protects that section's shortfall on its own; but the program's n is
/// the sum of each split's sections' n, and sections that count the same people (a site whose
/// people all enrolled lately has nobody in the later weeks, so there the program counts
/// exactly the other sites' people) have bands whose intersection can be one value: with
/// bands counted down from each section's number started, program "22–32" and a site's
/// "12–22" gave 22 of the site's 23, one person who stopped. So, per week, what a reader knows of every section's n — the printed value or
/// band; else at least `min` when the mean is shown or withheld by the sum audit, else what
/// the rule leaves hidden; and, the safe side, 0 exactly when the section has nobody that week
/// (a reader who knows when its people enrolled knows it) — is narrowed by the relations
/// program = Σ sections of each split (interval propagation, run to its fixed point). A section
/// whose shortfall from its number started, or whose n, is 1 … min − 1 and left with fewer
/// than three possible values, loses its printed n; when it prints none, the section of the
/// same relation with the fewest people started loses its (the program's last). Repeated
/// until nothing is narrowed.
fn audit_week_bands(
    sections: &[WeekSection],
    parts: &[Vec<usize>],
    min: u32,
) -> Vec<(usize, usize)> {
    let min = u64::from(min);
    let mut dropped: Vec<(usize, usize)> = Vec::new();
    if sections.is_empty() || min == 0 {
        return dropped;
    }
    // Only splits whose sections count every enrolled person of the program once.
    let parts: Vec<&Vec<usize>> = parts
        .iter()
        .filter(|p| {
            !p.is_empty()
                && p.iter().map(|&i| sections[i].enrolled).sum::<u64>() == sections[0].enrolled
        })
        .collect();
    let weeks = sections[0].n.len();
    for w in 0..weeks {
        let mut unprinted: BTreeSet<usize> = BTreeSet::new();
        loop {
            let mut b: Vec<(u64, u64)> = sections
                .iter()
                .enumerate()
                .map(|(i, s)| known_week_n(s, w, unprinted.contains(&i), min))
                .collect();
            for _ in 0..4 * sections.len() + 4 {
                let before = b.clone();
                for p in &parts {
                    let lo_sum: u64 = p.iter().map(|&i| b[i].0).sum();
                    let hi_sum: u64 = p.iter().map(|&i| b[i].1).sum();
                    b[0] = (b[0].0.max(lo_sum), b[0].1.min(hi_sum));
                    for &i in p.iter() {
                        let (olo, ohi) = (lo_sum - b[i].0, hi_sum - b[i].1);
                        b[i] = (
                            b[i].0.max(b[0].0.saturating_sub(ohi)),
                            b[i].1.min(b[0].1.saturating_sub(olo)),
                        );
                    }
                }
                if b == before {
                    break;
                }
            }
            let narrowed = |i: usize| {
                let s = &sections[i];
                let (lo, hi) = b[i];
                let few = hi < lo + 2;
                let n = s.n[w];
                let small_n = (1..min).contains(&n);
                let small_short = s
                    .started
                    .is_some_and(|st| (1..min).contains(&st.saturating_sub(n)));
                few && (small_n || small_short)
            };
            let Some(i) = (0..sections.len()).find(|&i| narrowed(i)) else {
                break;
            };
            let printed = |j: usize| {
                !unprinted.contains(&j)
                    && !matches!(
                        week_count(sections[j].n[w], sections[j].bounds[w], min as u32).0,
                        Shown::Suppressed
                    )
            };
            let next = if printed(i) {
                Some(i)
            } else {
                let mut linked: Vec<usize> = if i == 0 {
                    parts.iter().flat_map(|p| p.iter().copied()).collect()
                } else {
                    parts
                        .iter()
                        .filter(|p| p.contains(&i))
                        .flat_map(|p| p.iter().copied())
                        .collect()
                };
                linked.retain(|&j| j != 0 && printed(j));
                linked.sort_by_key(|&j| (sections[j].started.unwrap_or(0), j));
                linked.first().copied().or((printed(0)).then_some(0))
            };
            let Some(j) = next else {
                // Nothing printed is left to take away (the bounds come from the rule alone).
                break;
            };
            unprinted.insert(j);
            dropped.push((j, w));
        }
    }
    dropped
}

/// The week means that must not be printed although the rule and the sum audit would print
/// them, as (section, week index) pairs; `sections[0]` is the program, `parts` the sections of
/// each split, `dropped` the bands [`audit_week_bands`] took away.
///
/// A week's n is printed as a band once some people have stopped, but the program's mean is
/// its sections' means weighted by their n, Σ n_s (m_s − M) = 0, and its variance theirs
/// pooled, (n − 1) S² = Σ (n_s − 1) s_s² + Σ n_s (m_s − M)², with each SD given by its
/// interval's width (t · s/√n). With every section's mean and interval printed beside the
/// program's, the two identities pin the n that the bands leave open. The sample program's
/// September, week 14: the program −4.05 %, Harbour Depot −3.62 % ("11–13" of 14 started),
/// Kiln Row −4.08 % ("11–22" of 23), North Office −4.43 % (13 of 13): only n = 12 or 13 in
/// Harbour Depot fit the means, one or two people who stopped (and the intervals gave the same
/// in weeks 11 to 13, which the means alone left at three values); in a 40-person demo (the
/// site groups "combined", 22 started, beside Kiln Row, 18, all weighing in) the means gave the
/// combined group's n exactly, 21: one person had stopped. Nor are three or more unknown n
/// safe: the two identities leave a family of solutions, but with small sections the bands
/// hold few whole numbers, and three sites of 14, 15 and 16 started, all banded, gave Aspen's
/// n as 11 or 12 of 14 and Cedar's as 14 or 15 of 16 (a demo of 45 in three such sites, its
/// September: Birch's week 24 exactly, 11 of 15). The second identity is not linear in the n,
/// so it is not solved; the rule rests on what the reader sees: wherever a split's sections
/// (two or more with people that week; one with nobody adds nothing) all print their mean
/// beside the program's and any of them prints its n only as a band (or not at all), the mean
/// of the split's section with the fewest people started is withheld. Without one section's
/// mean (and its interval) both identities have an unknown more, a real number free to take up
/// any n. The cost: in the 300-person test of three sites of about 100, the smallest site's
/// weeks 9 to 26 (everyone's n a band) lose their means.
///
/// The section withheld must stay withheld in later releases, whose figures for a past week
/// are those of the same people: three late enrolees at the smallest site made another the
/// smallest, and the two releases together printed every site's mean of weeks 9–12 (Aspen 11
/// or 12 of 14 again). So a section whose week's mean an earlier release printed over the same
/// people who could have a value in it (by enrolment and withdrawal dates, the ledger's
/// `sum_scopes`) is withheld only when every section's were; among the others, the one with the
/// fewest people started as printed (a hidden number started is not used: the choice would tell
/// which hidden count is the smaller). Who has a value that week is not used either: beside a
/// section withheld because a joiner could have a value ([`moved`]), taking the section whose
/// week's people changed told whether the joiner has one. A section withheld by that rule is
/// never the one taken. A withheld mean is not recorded in the ledger as published.
fn audit_week_means(
    sections: &[WeekSection],
    parts: &[Vec<usize>],
    dropped: &[(usize, usize)],
    min: u32,
) -> Vec<(usize, usize)> {
    let mut out: Vec<(usize, usize)> = Vec::new();
    if sections.is_empty() || min == 0 {
        return out;
    }
    let exact = |i: usize, w: usize| {
        let s = &sections[i];
        !dropped.contains(&(i, w))
            && matches!(week_count(s.n[w], s.bounds[w], min).0, Shown::Value(_))
    };
    for w in 0..sections[0].n.len() {
        if sections[0].mean[w].is_none() {
            continue;
        }
        for part in parts {
            let with: Vec<usize> = part
                .iter()
                .copied()
                .filter(|&i| sections[i].n[w] > 0)
                .collect();
            let open = with.iter().filter(|&&i| !exact(i, w)).count();
            if with.len() < 2 || with.iter().any(|&i| sections[i].mean[w].is_none()) || open == 0 {
                continue;
            }
            // A section whose week an earlier release may have printed is not the one
            // withheld while another will do: withholding it now and printing, beside it, a
            // mean withheld before would give the reader every mean of the week.
            // A section withheld by the rule on means printed again is not the one taken: it
            // may be withheld only this time, and the section the split's rule withheld before
            // must stay withheld (the split's rule applies as if it were printed).
            let take = with
                .iter()
                .copied()
                .filter(|&i| !sections[i].forced[w])
                .min_by_key(|&i| {
                    let s = &sections[i];
                    (s.known[w], s.started.unwrap_or(u64::MAX), i)
                });
            if let Some(take) = take {
                out.push((take, w));
            }
        }
    }
    out
}

/// What a reader knows of section `s`'s n in week `w` ([`audit_week_bands`]).
fn known_week_n(s: &WeekSection, w: usize, unprinted: bool, min: u64) -> (u64, u64) {
    let n = s.n[w];
    if n == 0 {
        return (0, 0);
    }
    let top = s.started.unwrap_or(s.enrolled);
    let (shown, mean_shown) = week_count(n, s.bounds[w], min as u32);
    if !unprinted {
        match shown {
            Shown::Value(v) => return (v, v),
            Shown::Range { lo, hi } => return (lo.max(min), hi),
            _ => {}
        }
    }
    if mean_shown || s.withdrawn[w] {
        return (min, top);
    }
    // Hidden by the rule: every n the rule would hide (n < min, or a band too narrow).
    let hidden_top = (0..=top)
        .rev()
        .find(|&m| !week_count(m, s.bounds[w], min as u32).1)
        .unwrap_or(0);
    (0, hidden_top)
}

/// Links every pair of counts of the release whose people are nested and whose difference is
/// 1 … min − 1 (found from who is counted, not from the figures' names: "enrolled" and "with
/// activity data", "started" and "with a plateau verdict", a team's count and that of the one
/// site all its people are at) by the relation `outer = inner + difference`, so that the
/// suppression and the range audit protect the difference like any printed count. The difference is an existing cell when one
/// counts exactly those people, else a hidden cell that is never printed
/// ([`CellTable::add_difference`]). Pairs whose relation the table already has are skipped.
///
/// Counts of exactly the same people (in any sections: "active" and "with activity data" when
/// every active person logged activity, or a site and a team of the same people) are linked by
/// `one = other`: a reader who knows who has data reads a hidden one off the shown other, so
/// both are shown or both hidden. Without it, "active" hidden as the complement for the few
/// active people without a recent weigh-in, beside "with activity data" shown, gave those few
/// exactly (active − with a recent weigh-in).
fn link_nested_counts<'a>(
    table: &mut CellTable,
    drafts: impl Iterator<Item = &'a Draft>,
    people: usize,
    min: u32,
) {
    let words = people.div_ceil(64).max(1);
    let mut cells: Vec<(usize, CellId, Vec<u64>, u64)> = Vec::new();
    for (section, d) in drafts.enumerate() {
        let raw = d.raw.as_ref().expect("shown sections have figures");
        for (&k, &c) in &d.cells {
            let mut bits = vec![0u64; words];
            for &i in raw.members.get(&k).into_iter().flatten() {
                bits[i / 64] |= 1 << (i % 64);
            }
            cells.push((section, c, bits, raw.count(k)));
        }
    }
    let mut by_set: HashMap<Vec<u64>, CellId> = HashMap::new();
    let mut same: Vec<(CellId, CellId)> = Vec::new();
    for (_, c, bits, n) in &cells {
        let first = *by_set.entry(bits.clone()).or_insert(*c);
        if first != *c && *n > 0 {
            same.push((first, *c));
        }
    }
    for (first, c) in same {
        table.add_relation(first, vec![c]);
    }
    let mut known: BTreeSet<(CellId, Vec<CellId>)> = table
        .relations()
        .iter()
        .map(|r| {
            let mut parts = r.parts.clone();
            parts.sort_unstable();
            (r.total, parts)
        })
        .collect();
    let min = u64::from(min);
    for (sa, a, abits, an) in &cells {
        // Within a section, and between sections of two splits (a team all of whose people
        // are at one site: the site's 23 enrolled beside the team's 18 gave the site's other
        // 5 exactly). Not against the program's section: a site's count there differs by the
        // other sites' people, which the program = Σ sites relations already protect. (Two
        // sections of one split hold different people, so none of theirs is nested.)
        for (_, b, bbits, bn) in cells
            .iter()
            .filter(|c| c.0 == *sa || (c.0 != 0 && *sa != 0))
        {
            let Some(d) = an.checked_sub(*bn) else {
                continue;
            };
            if d == 0 || d >= min || *bn == 0 {
                continue;
            }
            let nested = abits.iter().zip(bbits).all(|(x, y)| y & !x == 0);
            if !nested {
                continue;
            }
            let diff: Vec<u64> = abits.iter().zip(bbits).map(|(x, y)| x & !y).collect();
            let (outer, inner) = (*a, *b);
            match by_set.get(&diff) {
                Some(&e) => {
                    let mut parts = vec![inner, e];
                    parts.sort_unstable();
                    if known.insert((outer, parts)) {
                        table.add_relation(outer, vec![inner, e]);
                    }
                }
                None => {
                    let e = table.add_difference(outer, inner);
                    by_set.insert(diff, e);
                    let mut parts = vec![inner, e];
                    parts.sort_unstable();
                    known.insert((outer, parts));
                }
            }
        }
    }
}

/// A weight-change line, week point or adherence median the sum audit can withhold.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Line {
    Bocf,
    Locf,
    Completers,
    Week(u32),
    /// An adherence median (index into [`ADHERENCE_TAGS`]).
    Adherence(usize),
}

/// The atom tag of each adherence measure's values (activity minutes, weigh-ins, food-log
/// days, attendance), in the order of `Raw::adherence`.
const ADHERENCE_TAGS: [&str; 4] = [
    "activity minutes",
    "weigh-ins",
    "food-log days",
    "attendance",
];

impl Line {
    fn name(self) -> String {
        match self {
            Line::Bocf => "weight change, baseline carried forward".into(),
            Line::Locf => "weight change, last observation carried forward".into(),
            Line::Completers => "weight change, completers".into(),
            Line::Week(w) => format!("mean change in week {}", w + 1),
            Line::Adherence(i) => format!(
                "median {}",
                [
                    "activity minutes per week",
                    "days with a weigh-in per week",
                    "food-log days per week",
                    "session attendance",
                ][i]
            ),
        }
    }
}

/// The whole program's headline counts that are printed as a band rather than hidden when
/// an earlier release would give away the difference (enrolment, the number started and
/// with a recent weigh-in, retention's numerator): a sponsor needs them every month.
const HEADLINE_KINDS: [Kind; 4] = [
    Kind::Enrolled,
    Kind::Started,
    Kind::WithOutcome,
    Kind::Retained,
];

/// The band a headline count `n` is printed in when an earlier release would give away its
/// difference: the fixed band of `min − 1` whole numbers holding it (at least 3), counted
/// from 0 — with the default minimum of 11, 70 to 79, 80 to 89. Fixed bands (not centred on
/// `n`) give the same band for the same count in every release, so a reader comparing two
/// releases learns only that the counts differ by less than two bands, never a difference
/// narrowed to fewer than three values (project rule; rounding to a base is common practice
/// in statistical disclosure control).
pub(super) fn headline_band(n: u64, min: u32) -> (u64, u64) {
    let width = u64::from(min.saturating_sub(1)).max(3);
    let lo = n / width * width;
    (lo, lo + width - 1)
}

/// The token standing for one person in the audit and the ledger.
fn person_token(secret: Option<&[u8; 32]>, pseudonym: Option<u64>, position: usize) -> u64 {
    let base = pseudonym.unwrap_or(position as u64 | 1 << 63);
    match secret {
        Some(key) => {
            let h = blake3::keyed_hash(key, &base.to_le_bytes());
            u64::from_le_bytes(h.as_bytes()[..8].try_into().expect("8 bytes"))
        }
        None => base,
    }
}

/// The key of one unknown number about one person: the same person's same value (to the bit)
/// gets the same key in every release, so that a reader's subtraction across releases is seen.
fn atom(token: u64, tag: &str, a: f64, b: f64) -> u64 {
    let mut h = blake3::Hasher::new();
    h.update(&token.to_le_bytes());
    h.update(tag.as_bytes());
    h.update(&a.to_bits().to_le_bytes());
    h.update(&b.to_bits().to_le_bytes());
    u64::from_le_bytes(h.finalize().as_bytes()[..8].try_into().expect("8 bytes"))
}

fn interval_pct((lo, hi): (f64, f64)) -> Interval {
    Interval {
        lo: 100.0 * lo,
        hi: 100.0 * hi,
    }
}

/// Published precision of medians and median-interval limits of % change (they are single
/// people's values, or the mean of two): multiples of 0.5 %.
pub const MEDIAN_STEP_PERCENT: f64 = 0.5;
/// Published precision of medians and median-interval limits of kg change: 0.5 kg.
pub const MEDIAN_STEP_KG: f64 = 0.5;
/// Published precision of means, SDs and mean intervals: 0.01 (the reports print 0.1).
pub const MEAN_STEP: f64 = 0.01;
/// Published precision of the adherence medians: activity minutes, weigh-ins per week,
/// food-log days per week, attendance %.
pub const ADHERENCE_STEPS: [f64; 4] = [10.0, 0.5, 0.5, 5.0];

/// `v` rounded to the nearest multiple of `step` (halves away from zero).
pub fn round_to(v: f64, step: f64) -> f64 {
    let r = (v / step).round() * step;
    // Clean binary noise such as 0.30000000000000004 and −0.
    let r = (r * 1e6).round() / 1e6;
    if r == 0.0 { 0.0 } else { r }
}

/// `v` rounded outward to a multiple of `step`: down for a lower limit (`down`), up for an
/// upper one, so a rounded interval holds the computed one. A value within rounding error of
/// a multiple is that multiple.
pub fn round_outward(v: f64, step: f64, down: bool) -> f64 {
    let x = v / step;
    let k = if (x - x.round()).abs() < 1e-9 {
        x.round()
    } else if down {
        x.floor()
    } else {
        x.ceil()
    };
    let r = ((k * step) * 1e6).round() / 1e6;
    if r == 0.0 { 0.0 } else { r }
}

fn change_stats(values: &[f64], hidden: bool, confidence: f64, step: f64) -> ChangeStats {
    let mci = stats::mean_ci_t(values, confidence);
    let medci = stats::median_ci(values, confidence);
    let m = |v: f64| round_to(v, MEAN_STEP);
    let q = |v: f64| round_to(v, step);
    ChangeStats {
        mean: Shown::from_option(stats::mean(values).map(m), hidden),
        sd: Shown::from_option(mci.map(|c| m(c.sd)), hidden),
        mean_ci: Shown::from_option(
            mci.map(|c| Interval {
                lo: m(c.lo),
                hi: m(c.hi),
            }),
            hidden,
        ),
        median: Shown::from_option(stats::median(values).map(q), hidden),
        // The limits outward, the median to the nearest: rounded to the nearest 0.5, an
        // interval of −4.67 to −3.81 % printed as "−4.5 to −4.0" (demo, 150, September).
        median_ci: Shown::from_option(
            medci.map(|c| Interval {
                lo: round_outward(c.lo, step, true),
                hi: round_outward(c.hi, step, false),
            }),
            hidden,
        ),
        median_ci_coverage: Shown::from_option(medci.map(|c| c.coverage), hidden),
    }
}

#[allow(clippy::too_many_arguments)]
fn section_stats(
    raw: &Raw,
    cells: &BTreeMap<Kind, CellId>,
    table: &CellTable,
    ranges: &[Option<(u64, u64)>],
    withdrawn: &BTreeSet<Line>,
    weeks: &BTreeSet<u32>,
    week_bounds: &[WeekBounds],
    unbanded: &BTreeSet<u32>,
    min: u32,
    confidence: f64,
) -> SectionStats {
    let hidden = |k: Kind| table.is_suppressed(cells[&k]);
    let range = |k: Kind| ranges.get(cells[&k]).copied().flatten();
    let count = |k: Kind| {
        if hidden(k) {
            match range(k) {
                Some((lo, hi)) => Shown::Range { lo, hi },
                None => Shown::Suppressed,
            }
        } else {
            Shown::Value(raw.count(k))
        }
    };
    let z = stats::z_for_confidence(confidence);
    // A hidden count over a shown denominator: its share as the range its count allows (no
    // interval: the interval would be computed from the hidden count).
    let share = |x: Kind, n: Kind| {
        let (xv, nv) = (raw.count(x), raw.count(n));
        let bounds = |k: Kind, v: u64| {
            if hidden(k) { range(k) } else { Some((v, v)) }
        };
        if nv > 0 && (hidden(x) || hidden(n)) {
            let pct = match (bounds(x, xv), bounds(n, nv)) {
                (Some((xlo, xhi)), Some((nlo, nhi))) if nlo > 0 => Shown::Range {
                    lo: 100.0 * xlo as f64 / nhi as f64,
                    hi: (100.0 * xhi as f64 / nlo as f64).min(100.0),
                },
                _ => Shown::Suppressed,
            };
            return (pct, Shown::Suppressed);
        }
        let h = hidden(x) || hidden(n);
        let pct = (nv > 0).then(|| 100.0 * xv as f64 / nv as f64);
        let ci = (nv > 0).then(|| interval_pct(stats::wilson(xv, nv, z)));
        (Shown::from_option(pct, h), Shown::from_option(ci, h))
    };
    let line = |which: Line, n: Kind, pct: &[f64], kg: &[f64]| {
        let h = hidden(n) || withdrawn.contains(&which);
        ChangeLine {
            n: count(n),
            percent: change_stats(pct, h, confidence, MEDIAN_STEP_PERCENT),
            kg: change_stats(kg, h, confidence, MEDIAN_STEP_KG),
        }
    };
    let (with_outcome_percent, _) = share(Kind::WithOutcome, Kind::Started);
    let (retention_percent, _) = share(Kind::Retained, Kind::Started);
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
    let started = (!hidden(Kind::Started)).then(|| raw.count(Kind::Started));
    let trajectory = weeks
        .iter()
        .enumerate()
        .map(|(wi, &w)| {
            let empty = Vec::new();
            let vals = raw.weeks.get(&w).unwrap_or(&empty);
            let b = week_bounds
                .get(wi)
                .copied()
                .unwrap_or_else(|| WeekBounds::open(started, raw.count(Kind::Enrolled)));
            let (mut n, mean_shown) = week_count(vals.len() as u64, b, min);
            if unbanded.contains(&w) {
                n = Shown::Suppressed;
            }
            let h = !mean_shown || withdrawn.contains(&Line::Week(w));
            let mci = stats::mean_ci_t(vals, confidence);
            WeekPoint {
                week: w,
                n,
                mean_percent: Shown::from_option(
                    stats::mean(vals).map(|v| round_to(v, MEAN_STEP)),
                    h,
                ),
                ci: Shown::from_option(
                    mci.map(|m| Interval {
                        lo: round_to(m.lo, MEAN_STEP),
                        hi: round_to(m.hi, MEAN_STEP),
                    }),
                    h,
                ),
            }
        })
        .collect();
    let adherence_line = |i: usize| AdherenceLine {
        n: count(Kind::AdherenceN(i)),
        median: Shown::from_option(
            stats::median(&raw.adherence[i]).map(|v| round_to(v, ADHERENCE_STEPS[i])),
            hidden(Kind::AdherenceN(i)) || withdrawn.contains(&Line::Adherence(i)),
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
            with_outcome_percent,
            retained: count(Kind::Retained),
            discontinued: count(Kind::Discontinued),
            retention_percent,
        },
        weight_change: WeightChange {
            bocf: line(Line::Bocf, Kind::Started, &raw.bocf_pct, &raw.bocf_kg),
            locf: line(Line::Locf, Kind::Started, &raw.locf_pct, &raw.locf_kg),
            completers: line(
                Line::Completers,
                Kind::WithOutcome,
                &raw.comp_pct,
                &raw.comp_kg,
            ),
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
        with_clinician_review_flag: count(Kind::Flagged),
    }
}

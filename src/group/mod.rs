//! The group step: de-identified group statistics with small-cell suppression.
//!
//! The runner turns each participant's module outputs into one [`ParticipantSummary`] (no name,
//! no id) and calls [`summarize`]; the report code renders the returned [`GroupReport`] with the
//! group templates. Every figure of the report is a [`Shown`] value, so a hidden figure is
//! explicit data.
//!
//! What the report holds, per section (the whole program, then one section per value of each
//! `group_by` key): enrolment and retention, weight change under three missing-data rules
//! (BOCF primary, LOCF sensitivity, completers), milestone shares with Wilson intervals, a
//! histogram and a weekly trajectory of % change, adherence medians, plateau prevalence and the
//! number of clinician-review flags. See [`summary`] for the exact definitions and
//! [`suppress`] for the suppression algorithm (REFERENCE §8).
//!
//! These are descriptive programme figures, not clinical findings.

use std::collections::BTreeMap;

pub mod shown;
pub mod stats;
pub mod summary;
pub mod suppress;

#[cfg(test)]
mod tests;

pub use shown::{Interval, Shown};
pub use summary::{
    Adherence, AdherenceLine, ChangeLine, ChangeStats, Enrolment, GroupReport, Histogram,
    HistogramBin, Methods, Milestone, Plateau, Section, SectionKind, SectionStats, Split,
    WeekPoint, WeightChange, summarize,
};

/// One participant as the group step sees them: group attributes and derived figures only,
/// never a name or an id.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct ParticipantSummary {
    /// Group attributes (site, team, …) from the profile.
    pub groups: BTreeMap<String, String>,
    /// Counted in the program (the profile is usable). Rows with `false` are ignored here.
    pub enrolled: bool,
    /// Withdrew on or before the period end.
    pub withdrawn: bool,
    /// Has a baseline weight. The ITT denominator is "started": `started` and a positive,
    /// finite `baseline_kg` (a row claiming to have started without one is counted as not
    /// started).
    pub started: bool,
    /// Baseline weight, kg.
    pub baseline_kg: Option<f64>,
    /// Weight at the time point (trend weight at period end if a weigh-in exists within the
    /// outcome window before period end), else `None` (missing outcome).
    pub outcome_kg: Option<f64>,
    /// Last trend weight before the time point, for LOCF.
    pub last_observed_kg: Option<f64>,
    /// (week index since enrolment, % change of trend weight vs baseline), for trajectories.
    pub weekly_change_percent: Vec<(u32, f64)>,
    /// Mean activity minutes per week.
    pub activity_minutes_per_week: Option<f64>,
    /// Mean weigh-ins per week.
    pub weigh_ins_per_week: Option<f64>,
    /// Mean food-log days per week.
    pub food_log_days_per_week: Option<f64>,
    /// Sessions attended as % of sessions offered.
    pub attendance_percent: Option<f64>,
    /// In a plateau at period end; `None` = insufficient data for a verdict.
    pub in_plateau: Option<bool>,
    /// Number of clinician-review flags (only counted, never listed).
    pub clinical_flags: u32,
}

/// Options of the group step (from the program's report and privacy settings).
#[derive(Debug, Clone, PartialEq)]
pub struct GroupOptions {
    /// Smallest count that may be shown (counts 1 … min_cell_size − 1 are suppressed; 0 is
    /// shown). Default 11, i.e. no cell of 1 to 10 (CMS Cell Size Suppression Policy).
    pub min_cell_size: u32,
    /// Group attribute keys to split the program by, in report order (e.g. `site`, `team`).
    pub group_by: Vec<String>,
    /// Confidence level of every interval, strictly between 0.5 and 1 (default 0.95).
    pub confidence: f64,
}

impl Default for GroupOptions {
    fn default() -> Self {
        Self {
            min_cell_size: 11,
            group_by: Vec::new(),
            confidence: 0.95,
        }
    }
}

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
//! number of people with a clinician-review flag. See [`summary`] for the exact definitions and
//! [`suppress`] for the suppression algorithm (CMS Cell Size Suppression
//! Policy, with complementary suppression).
//!
//! These are descriptive programme figures, not clinical findings.

use std::collections::BTreeMap;

pub mod audit;
pub mod ledger;
pub mod shown;
pub mod stats;
pub mod summary;
pub mod suppress;
pub mod venn;

#[cfg(test)]
mod attack_tests;
#[cfg(test)]
mod tests;

pub use shown::{Interval, Shown};
pub use summary::{
    Adherence, AdherenceLine, AuditNote, ChangeLine, ChangeStats, Enrolment, GroupReport,
    Histogram, HistogramBin, Methods, Milestone, Plateau, ReleaseLine, Section, SectionKind,
    SectionStats, Split, WeekPoint, WeightChange, summarize, summarize_release,
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
    /// How many weeks since enrolment end in the period (week w ends on enrolment + 7w + 6
    /// days; from the enrolment date and the period's end alone, which a reader may know): the
    /// person cannot have a trajectory value of a later week. `None`: not known (taken as able
    /// to have a value in every week).
    pub weeks_in_period: Option<u32>,
    /// For someone who withdrew by the period's end, the week since enrolment of their
    /// withdrawal day (`None` otherwise): no later week of theirs is counted when their data
    /// stops there. See [`summary`]'s audit of figures printed again.
    pub withdrew_week: Option<u32>,
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
    /// A stable number standing for the participant across runs (a hash of the id, set by the
    /// runner), so that the audit can match the same person across releases. Never shown;
    /// mixed with the ledger's secret key before it is stored. `None`: the row's position.
    pub pseudonym: Option<u64>,
}

/// What earlier releases published, as the subtraction audit needs it (read from the ledger).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct History {
    /// Secret key mixed into every person token (`None`: the pseudonyms are used as they are).
    pub secret: Option<[u8; 32]>,
    /// Sums published before: per sum, its atoms as (person token, atom key).
    pub sums: Vec<Vec<(u64, u64)>>,
    /// Medians published before (the adherence medians): per median, the values it was taken
    /// over as (person token, atom key). Audited as if each were the sum of those values.
    pub orders: Vec<Vec<(u64, u64)>>,
    /// Counts published before: per count, the person tokens it counted.
    pub counts: Vec<Vec<u64>>,
    /// What each of `counts` counted (the figure's plain name, e.g. "enrolled"), aligned with
    /// `counts`; an empty name (a ledger written before names were kept) joins every family
    /// of the audit across releases.
    pub count_labels: Vec<String>,
    /// The people of the sections earlier counts were printed in (each section's enrolled
    /// and its started), for [`History::count_scopes`].
    pub scopes: Vec<Vec<u64>>,
    /// Aligned with `counts`: the enrolled and started people of the section each count was
    /// printed in, as indices into `scopes` (empty for a count of an older ledger). A count
    /// printed again over the same people, in a section that has since gained or lost a few
    /// people, says that none of them is counted in it.
    pub count_scopes: Vec<Vec<usize>>,
    /// Aligned with `sums`: the figure each sum was printed as (e.g. "mean change in week 3",
    /// whatever the section), empty for a sum of an older ledger.
    pub sum_labels: Vec<String>,
    /// Aligned with `sums`: the people who could have had a value in it when it was printed
    /// (its section's enrolled people, those of them with that week in the period, and the
    /// same without those who had withdrawn by then), as indices into `scopes`; empty for a
    /// sum of an older ledger. A mean printed again after that set changed by a few people
    /// would say whether they have a value in it.
    pub sum_scopes: Vec<Vec<usize>>,
}

impl History {
    /// Adds what a release published (its counts, sums, medians and their sections' people).
    pub fn add(&mut self, published: Published) {
        let offset = self.scopes.len();
        let shift = |ix: Vec<Vec<usize>>| -> Vec<Vec<usize>> {
            ix.into_iter()
                .map(|ix| ix.into_iter().map(|i| i + offset).collect())
                .collect()
        };
        // Older entries without names or sections stay aligned.
        self.sum_labels.resize(self.sums.len(), String::new());
        self.sum_scopes.resize(self.sums.len(), Vec::new());
        self.sum_labels.extend(published.sum_labels);
        self.sum_scopes.extend(shift(published.sum_scopes));
        self.sums.extend(published.sums);
        self.sum_labels.resize(self.sums.len(), String::new());
        self.sum_scopes.resize(self.sums.len(), Vec::new());
        self.orders.extend(published.orders);
        // Older entries without names or sections stay aligned.
        self.count_labels.resize(self.counts.len(), String::new());
        self.count_scopes.resize(self.counts.len(), Vec::new());
        self.counts.extend(published.counts);
        self.count_labels.extend(published.count_labels);
        self.scopes.extend(published.scopes);
        self.count_scopes.extend(shift(published.count_scopes));
        self.count_scopes.resize(self.counts.len(), Vec::new());
    }
}

/// What a release publishes as exact figures, in the form [`History`] keeps (for the ledger).
#[derive(Debug, Clone, Default, PartialEq)]
pub struct Published {
    /// Every shown sum (mean with its n): its atoms as (person token, atom key).
    pub sums: Vec<Vec<(u64, u64)>>,
    /// Every shown adherence median: the values it was taken over, as (person token, atom key).
    pub orders: Vec<Vec<(u64, u64)>>,
    /// Every shown count: the person tokens it counted.
    pub counts: Vec<Vec<u64>>,
    /// The plain name of each of `counts` (aligned).
    pub count_labels: Vec<String>,
    /// The enrolled and the started people of every section a count was printed in, and who
    /// could have had a value in each sum.
    pub scopes: Vec<Vec<u64>>,
    /// Aligned with `counts`: its section's enrolled and started people, as indices into
    /// `scopes`.
    pub count_scopes: Vec<Vec<usize>>,
    /// Aligned with `sums`: the figure each was printed as ([`History::sum_labels`]).
    pub sum_labels: Vec<String>,
    /// Aligned with `sums`: who could have had a value in it ([`History::sum_scopes`]), as
    /// indices into `scopes`.
    pub sum_scopes: Vec<Vec<usize>>,
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

/// The pseudonym of a participant id for [`ParticipantSummary::pseudonym`]: the first 8 bytes
/// of its blake3 hash.
pub fn pseudonym(id: &str) -> u64 {
    let h = blake3::hash(id.as_bytes());
    u64::from_le_bytes(h.as_bytes()[..8].try_into().expect("8 bytes"))
}

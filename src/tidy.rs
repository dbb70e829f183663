//! Tidy metrics for analysis: one row per participant per period (CSV and JSON, units in the
//! column names), weekly series in long form, and the data-quality list.

use crate::diag::Diagnostic;
use crate::group::{GroupReport, ParticipantSummary};
use crate::modules::ModuleResults;
use chrono::NaiveDate;
use cohortpress_metric_api::view::{Code, ModuleView};
use cohortpress_metric_api::{Flag, ParticipantData, Period, Scalar, TextValue};
use cohortpress_metric_energy::view::{EnergyView, OptionKind, names::OPTIONS};
use cohortpress_metric_outcomes::view::{OutcomesView, names::MILESTONES};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};
use std::io::Write;

/// One participant's tidy metrics.
#[derive(Debug, Clone, Serialize)]
pub struct TidyParticipant {
    /// Participant id (never the name).
    pub participant_id: String,
    /// Day of enrolment (profile.yaml), ISO 8601.
    pub enrolled: String,
    /// Day of withdrawal (profile.yaml), ISO 8601, when it is on or before the period's end.
    pub withdrew: Option<String>,
    /// What the withdrawal was (`consent` or `stopped_program`, profile.yaml's
    /// `withdrawal_reason`), beside `withdrew` and empty with it.
    pub withdrawal_reason: Option<String>,
    /// Has a baseline weight: counted in the group report's modified intention-to-treat
    /// denominator
    /// (false when the group report leaves the participant out: their weigh-ins are another
    /// folder's; set when the file is written).
    pub started: bool,
    /// Started and weighed in within the period's last 28 days: the group report has their
    /// weight at the period's end (a completer); without it, its primary analysis (BOCF)
    /// counts no change.
    pub completer: bool,
    /// Group attributes.
    pub groups: BTreeMap<String, String>,
    /// Scalars by module.
    pub scalars: Vec<(String, Scalar)>,
    /// Texts by module.
    pub texts: Vec<(String, TextValue)>,
    /// Rows of `metrics/weekly.csv` (participant, module, series, unit, week start, value,
    /// lower, upper), rendered once so a stored partial result reproduces them exactly.
    #[serde(skip)]
    pub weekly_rows: Vec<[String; 8]>,
    /// Rows of `metrics/tables.csv` (participant, module, table, row, column, unit, value),
    /// every module table in long form, rendered once like the weekly rows.
    #[serde(skip)]
    pub table_rows: Vec<[String; 7]>,
    /// Flags by module.
    pub flags: Vec<(String, Flag)>,
    /// Flags of `flags` seen at follow-up only, as (module, code): raised by weigh-ins after
    /// the day someone who stopped the program left it, not by their records up to that day.
    pub flags_at_follow_up: Vec<(String, String)>,
    /// Module failures (module, message).
    pub failures: Vec<(String, String)>,
    /// weights.csv's data rows (rows dropped for their shape included; not blank lines,
    /// repeated headers, date rows or summary rows); `None` when the file is absent.
    pub weights_rows_in_file: Option<usize>,
    /// weights.csv's rows used by the period's figures: weigh-ins after duplicates and the rows
    /// outside the participant's window are left out, and only those dated up to the period's
    /// end count; 0 when the file is refused as a whole.
    pub weights_rows_used: Option<usize>,
    /// intake.csv's data rows, as `weights_rows_in_file` (a day's total row is a summary row).
    pub intake_rows_in_file: Option<usize>,
    /// intake.csv's rows used (up to the period's end), before they are summed by day.
    pub intake_rows_used: Option<usize>,
    /// activity.csv's data rows, as `weights_rows_in_file`.
    pub activity_rows_in_file: Option<usize>,
    /// activity.csv's rows used (up to the period's end).
    pub activity_rows_used: Option<usize>,
}

/// The names of the row-count columns of participants.csv, in their order, with how each is
/// read from a [`TidyParticipant`].
type RowColumn = (&'static str, fn(&TidyParticipant) -> Option<usize>);
const ROW_COLUMNS: [RowColumn; 6] = [
    ("weights_rows_in_file", |t| t.weights_rows_in_file),
    ("weights_rows_used", |t| t.weights_rows_used),
    ("intake_rows_in_file", |t| t.intake_rows_in_file),
    ("intake_rows_used", |t| t.intake_rows_used),
    ("activity_rows_in_file", |t| t.activity_rows_in_file),
    ("activity_rows_used", |t| t.activity_rows_used),
];

/// Which of the `energy` module's `options` rows the participant's report offered under "What
/// to try next" (its options to restart a steady loss at the module's target rate). The module
/// calls a row `feasible` by its own limits (among them the floor at the careful end of the
/// intake, which the report shares: the implied intake's lower bound, or the logged intake
/// when lower); the report offers fewer: no walk under `guidance.min_walk_minutes`, no intake
/// change under `guidance.min_intake_change_kcal`, and none at all in a phase other than
/// restarting a loss. `tables.csv` gives each row the report's verdict as
/// the column [`OFFERED_IN_REPORT`].
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct ReportOffers {
    /// Eating less alone (the `intake` row).
    pub intake: bool,
    /// Walking more alone (the `walking` row).
    pub walking: bool,
    /// Some of each (the `combined` row, which the module sizes as the report does).
    pub both: bool,
}

/// The column `metrics/tables.csv` adds to each row of the `energy` module's `options` table:
/// `yes` when the participant's report offered that option, else `no` ([`ReportOffers`]).
pub const OFFERED_IN_REPORT: &str = "offered_in_report";

/// Collects a participant's tidy metrics from the module results and their row for the group
/// step (`summary`: who the group report counts as started and as a completer), for a period
/// ending on `period_to`; `rows` are the rows in and used of their files, `offers` what their
/// report offered of the `energy` module's options.
pub fn participant(
    data: &ParticipantData,
    results: &ModuleResults,
    summary: &ParticipantSummary,
    period_to: NaiveDate,
    rows: &crate::participant::FileRows,
    offers: ReportOffers,
) -> TidyParticipant {
    // As the group step counts them: started needs a positive, finite baseline weight.
    let started = summary.started
        && summary
            .baseline_kg
            .is_some_and(|b| b.is_finite() && b > 0.0);
    let mut t = TidyParticipant {
        participant_id: data.profile.id.clone(),
        enrolled: data.profile.enrolled.to_string(),
        withdrew: data
            .profile
            .withdrew
            .filter(|_| summary.withdrawn)
            .map(|d| d.to_string()),
        withdrawal_reason: Some(data.profile.withdrawal_reason.as_str().to_string())
            .filter(|_| summary.withdrawn && data.profile.withdrew.is_some()),
        started,
        completer: started && summary.outcome_kg.is_some(),
        groups: data.profile.groups.clone(),
        scalars: Vec::new(),
        texts: Vec::new(),
        weekly_rows: Vec::new(),
        table_rows: Vec::new(),
        flags: Vec::new(),
        flags_at_follow_up: results.follow_up_flags.clone(),
        failures: results
            .failures
            .iter()
            .map(|f| (f.module.clone(), f.for_outputs()))
            .collect(),
        weights_rows_in_file: rows.weights.in_file,
        weights_rows_used: rows.weights.used,
        intake_rows_in_file: rows.intake.in_file,
        intake_rows_used: rows.intake.used,
        activity_rows_in_file: rows.activity.in_file,
        activity_rows_used: rows.activity.used,
    };
    for (module, out) in &results.outputs {
        t.scalars
            .extend(out.scalars.iter().map(|s| (module.clone(), s.clone())));
        t.texts
            .extend(out.texts.iter().map(|s| (module.clone(), s.clone())));
        for s in out.series.iter().filter(|s| s.step == "weekly") {
            t.weekly_rows.extend(s.points.iter().map(|p| {
                [
                    data.profile.id.clone(),
                    module.clone(),
                    s.name.clone(),
                    s.unit.clone(),
                    // The week's Monday for every module, also for a first week a module
                    // dates by its first day in the period (plugins/PROTOCOL.md): one calendar
                    // week had two `week_start`s, and a join of two modules' rows on it lost
                    // that week. One point per calendar week (`modules::external` checks an
                    // external module's), so the key stays unique.
                    cohortpress_metric_adherence::week_start(p.date).to_string(),
                    num(Some(p.value)),
                    num(p.lower),
                    num(p.upper),
                ]
            }));
        }
        for table in &out.tables {
            let milestones = module == OutcomesView::MODULE && table.name == MILESTONES;
            let options = module == EnergyView::MODULE && table.name == OPTIONS;
            for (i, row) in table.rows.iter().enumerate() {
                let seen = if milestones {
                    follow_up_milestone(data, period_to, &table.columns, row)
                } else {
                    None
                };
                for (col, cell) in table.columns.iter().zip(row) {
                    let value = match cell {
                        cohortpress_metric_api::Cell::Number(x) => num(Some(*x)),
                        cohortpress_metric_api::Cell::Text(s) => s.clone(),
                        cohortpress_metric_api::Cell::Empty => String::new(),
                    };
                    // A milestone seen at follow-up reads as the participant's report has it.
                    let value = match (seen, col.name.as_str()) {
                        (Some(_), "reached") => SEEN_AT_FOLLOW_UP.to_string(),
                        (Some(d), "date_reached") => d.to_string(),
                        _ => value,
                    };
                    t.table_rows.push([
                        data.profile.id.clone(),
                        module.clone(),
                        table.name.clone(),
                        (i + 1).to_string(),
                        col.name.clone(),
                        col.unit.clone(),
                        value,
                    ]);
                }
                if options {
                    let kind = table
                        .columns
                        .iter()
                        .zip(row)
                        .find(|(c, _)| c.name == "kind")
                        .and_then(|(_, cell)| match cell {
                            cohortpress_metric_api::Cell::Text(s) => OptionKind::from_code(s).ok(),
                            _ => None,
                        });
                    let offered = match kind {
                        Some(OptionKind::Intake) => offers.intake,
                        Some(OptionKind::Walking) => offers.walking,
                        Some(OptionKind::Combined) => offers.both,
                        None => false,
                    };
                    t.table_rows.push([
                        data.profile.id.clone(),
                        module.clone(),
                        table.name.clone(),
                        (i + 1).to_string(),
                        OFFERED_IN_REPORT.to_string(),
                        String::new(),
                        if offered { "yes" } else { "no" }.to_string(),
                    ]);
                }
            }
        }
        t.flags
            .extend(out.flags.iter().map(|s| (module.clone(), s.clone())));
    }
    t
}

/// How `metrics/tables.csv` writes `reached` for a loss milestone seen at follow-up.
pub const SEEN_AT_FOLLOW_UP: &str = "seen_at_follow_up";

/// For a row of the outcomes module's `milestones` table: the day a milestone was seen at
/// follow-up (`crate::modules::run::seen_at_follow_up`), when the trend first reached it after
/// the `withdrew` day of someone who stopped the program; `None` when it was reached in the
/// program or not at all. `tables.csv` read "reached yes, date_reached 2026-08-19" for SG-001
/// of the sample program, who left on 15 Aug 2026 and weighed in next on 5 Sep, where the
/// participant's report reads "10 % loss · seen at follow-up 5 Sep 2026, after leaving".
fn follow_up_milestone(
    data: &ParticipantData,
    period_to: NaiveDate,
    columns: &[cohortpress_metric_api::Column],
    row: &[cohortpress_metric_api::Cell],
) -> Option<NaiveDate> {
    let left = data
        .profile
        .withdrew
        .filter(|_| data.profile.follow_up_weigh_ins())?;
    let cell = |name: &str| {
        columns
            .iter()
            .position(|c| c.name == name)
            .and_then(|i| row.get(i))
    };
    let text = |name: &str| match cell(name) {
        Some(cohortpress_metric_api::Cell::Text(s)) => Some(s.as_str()),
        _ => None,
    };
    if text("reached") != Some("yes") {
        return None;
    }
    let crossed = NaiveDate::parse_from_str(text("date_reached")?, "%Y-%m-%d").ok()?;
    let days = crate::modules::run::weigh_in_days(data, period_to);
    crate::modules::run::seen_at_follow_up(Some(left), &days, crossed)
}

/// In one participant's `participants.json` record, writes the values and bounds of the
/// integer-typed scalar columns ([`Columns::integers`]) as JSON integers (`38`, not `38.0`), as
/// `participants.csv` and its descriptor have them.
fn whole_numbers_as_integers(row: &mut serde_json::Value, integers: &BTreeSet<(String, String)>) {
    let Some(scalars) = row.get_mut("scalars").and_then(|s| s.as_array_mut()) else {
        return;
    };
    for entry in scalars {
        let Some([module, scalar]) = entry.as_array_mut().map(|a| a.as_mut_slice()) else {
            continue;
        };
        let (Some(m), Some(n)) = (
            module.as_str().map(str::to_string),
            scalar
                .get("name")
                .and_then(|n| n.as_str())
                .map(str::to_string),
        ) else {
            continue;
        };
        if !integers.contains(&(m, n)) {
            continue;
        }
        for key in ["value", "lower", "upper"] {
            if let Some(v) = scalar.get_mut(key)
                && let Some(x) = v.as_f64()
            {
                // Whole and within ±2^53 ([`Columns::integers`]), so the cast is exact.
                *v = serde_json::Value::from(x as i64);
            }
        }
    }
}

/// Formats a number for CSV: shortest round-trip representation, empty when missing.
fn num(v: Option<f64>) -> String {
    match v {
        Some(x) if x.is_finite() => format!("{x}"),
        _ => String::new(),
    }
}

/// The column set of `metrics/participants.csv`: the union over participants of their group
/// keys, scalars (with interval columns when any participant has an interval) and texts.
/// Columns follow the module order of the program, then names alphabetically, so the order
/// does not depend on which participant was seen first (participants are processed in
/// parallel).
#[derive(Debug, Clone, Default)]
pub struct Columns {
    modules: Vec<String>,
    group_keys: BTreeSet<String>,
    scalars: BTreeMap<(usize, String, String), bool>,
    texts: BTreeSet<(usize, String, String)>,
    /// Text columns holding a value that is not an ISO 8601 day: never typed `date`, whatever
    /// the module declares.
    not_dates: BTreeSet<(String, String)>,
    /// Scalar columns holding a value or bound that is not a whole number: never typed
    /// `integer`, whatever the module declares.
    not_whole: BTreeSet<(String, String)>,
    /// The distinct non-empty values written in each text column, up to
    /// [`MAX_CODES_OBSERVED`]; `None` beyond that (free text, not a list of codes).
    text_values: BTreeMap<(String, String), Option<BTreeSet<String>>>,
}

/// Distinct values of a text column kept to compare with its declared codes: more than this
/// is not a column of codes, and the set stops growing.
const MAX_CODES_OBSERVED: usize = 64;

impl Columns {
    /// An empty set for modules that run in the order `modules`.
    pub fn new(modules: Vec<String>) -> Self {
        Columns {
            modules,
            ..Default::default()
        }
    }

    fn rank(&self, module: &str) -> usize {
        self.modules
            .iter()
            .position(|m| m == module)
            .unwrap_or(self.modules.len())
    }

    /// Adds the columns one participant's metrics need.
    pub fn observe(&mut self, t: &TidyParticipant) {
        self.group_keys.extend(t.groups.keys().cloned());
        for (m, sc) in &t.scalars {
            let interval = sc.lower.is_some() || sc.upper.is_some();
            if [sc.value, sc.lower, sc.upper]
                .into_iter()
                .flatten()
                .any(|x| x.fract() != 0.0 || x.abs() > MAX_EXACT_INTEGER)
            {
                self.not_whole.insert((m.clone(), sc.name.clone()));
            }
            *self
                .scalars
                .entry((self.rank(m), m.clone(), sc.name.clone()))
                .or_default() |= interval;
        }
        for (m, tx) in &t.texts {
            self.texts
                .insert((self.rank(m), m.clone(), tx.name.clone()));
            if !tx.value.is_empty() && !is_iso_day(&tx.value) {
                self.not_dates.insert((m.clone(), tx.name.clone()));
            }
            if !tx.value.is_empty() {
                let seen = self
                    .text_values
                    .entry((m.clone(), tx.name.clone()))
                    .or_insert_with(|| Some(BTreeSet::new()));
                if let Some(set) = seen {
                    if !set.contains(&tx.value) {
                        set.insert(tx.value.clone());
                    }
                    if set.len() > MAX_CODES_OBSERVED {
                        *seen = None;
                    }
                }
            }
        }
    }
}

/// Whether `s` is a day written as a Table Schema `date` in its default format is: ISO 8601
/// `YYYY-MM-DD`, four digits, two and two (Frictionless Table Schema, `date`, format
/// `default`). chrono alone also reads `2027-3-1` and `+2027-03-01`, which a reader of the
/// descriptor refuses as dates.
fn is_iso_day(s: &str) -> bool {
    let b = s.as_bytes();
    b.len() == 10
        && b.iter().enumerate().all(|(i, c)| match i {
            4 | 7 => *c == b'-',
            _ => c.is_ascii_digit(),
        })
        && chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").is_ok()
}

/// The largest whole number an `f64` holds exactly (2^53): beyond it a written integer could
/// differ from the value.
const MAX_EXACT_INTEGER: f64 = 9_007_199_254_740_992.0;

impl Columns {
    /// The codes a text column (module, name) may take, for its `enum` constraint: the codes
    /// its module declares ([`cohortpress_metric_api::OutputSpec::codes`]), when every value
    /// written is one of them. `None` for a column without declared codes, or one holding a
    /// value outside them (an external module's output that breaks its declaration is
    /// described as free text rather than with a constraint its own values fail).
    pub fn codes(
        &self,
        specs: &[cohortpress_metric_api::ModuleSpec],
        module: &str,
        name: &str,
    ) -> Option<Vec<String>> {
        let declared = &specs
            .iter()
            .find(|s| s.id == module)?
            .outputs
            .iter()
            .find(|o| o.name == name)?
            .codes;
        if declared.is_empty() {
            return None;
        }
        let key = (module.to_owned(), name.to_owned());
        let fits = match self.text_values.get(&key) {
            None => true,
            Some(None) => false,
            Some(Some(seen)) => seen.iter().all(|v| declared.contains(v)),
        };
        fits.then(|| declared.clone())
    }

    /// The scalar columns (module, name) typed `integer`: declared counts
    /// ([`cohortpress_metric_api::OutputSpec::whole`]) whose every value written is whole.
    pub fn integers(
        &self,
        specs: &[cohortpress_metric_api::ModuleSpec],
    ) -> BTreeSet<(String, String)> {
        self.scalars
            .keys()
            .filter(|(_, m, n)| {
                !self.not_whole.contains(&(m.clone(), n.clone()))
                    && specs
                        .iter()
                        .find(|s| s.id == *m)
                        .and_then(|s| s.outputs.iter().find(|o| o.name == *n))
                        .is_some_and(|o| o.whole)
            })
            .map(|(_, m, n)| (m.clone(), n.clone()))
            .collect()
    }
}

/// Where the streamed tidy files go: `metrics/participants.csv`, `metrics/participants.json`,
/// `metrics/weekly.csv` and `metrics/tables.csv` (the caller opens and closes them).
pub struct TidySinks<'a> {
    /// `metrics/participants.csv`.
    pub participants: &'a mut dyn Write,
    /// `metrics/participants.json`.
    pub json: &'a mut dyn Write,
    /// `metrics/weekly.csv`.
    pub weekly: &'a mut dyn Write,
    /// `metrics/tables.csv`.
    pub tables: &'a mut dyn Write,
}

/// Reads one participant's tidy metrics by id: `Ok(None)` for a participant without any.
pub type LoadTidy<'a> = dyn Fn(&str) -> Result<Option<TidyParticipant>, String> + Sync + 'a;

/// An error while rendering the tidy files.
pub type TidyError = Box<dyn std::error::Error + Send + Sync>;

/// Streams the participants' tidy metrics into `sinks`, in the order of `ids`.
///
/// Participants' metrics are not held in memory: `load` reads each back (the run reads the
/// partial results it has already written) a chunk at a time, so memory does not grow with the
/// number of participants.
pub fn render(
    period: Period,
    columns: &Columns,
    specs: &[cohortpress_metric_api::ModuleSpec],
    ids: &[String],
    load: &LoadTidy<'_>,
    sinks: TidySinks<'_>,
) -> Result<(), TidyError> {
    let TidySinks {
        participants,
        json,
        weekly,
        tables,
    } = sinks;
    let mut participants = crate::csv_out::Writer::from_writer(participants);
    let mut weekly = crate::csv_out::Writer::from_writer(weekly);
    let mut tables = crate::csv_out::Writer::from_writer(tables);
    let (from, to) = (period.from.to_string(), period.to.to_string());

    let mut header = vec![
        "participant_id".to_string(),
        "period_from".into(),
        "period_to".into(),
        "enrolled".into(),
        "withdrew".into(),
        "withdrawal_reason".into(),
        "started".into(),
        "completer".into(),
    ];
    header.extend(columns.group_keys.iter().map(|k| format!("group_{k}")));
    for ((_, m, n), interval) in &columns.scalars {
        header.push(format!("{m}.{n}"));
        if *interval {
            header.push(format!("{m}.{n}_lower95"));
            header.push(format!("{m}.{n}_upper95"));
        }
    }
    header.extend(columns.texts.iter().map(|(_, m, n)| format!("{m}.{n}")));
    header.push("clinical_flags".into());
    header.push("clinical_flags_at_follow_up".into());
    header.push("module_failures".into());
    header.extend(ROW_COLUMNS.iter().map(|(name, _)| name.to_string()));
    participants.write_record(&header)?;
    weekly.write_record([
        "participant_id",
        "module",
        "series",
        "unit",
        "week_start",
        "value",
        "lower95",
        "upper95",
    ])?;
    tables.write_record([
        "participant_id",
        "module",
        "table",
        "row",
        "column",
        "unit",
        "value",
    ])?;
    json.write_all(b"[")?;

    #[derive(Serialize)]
    struct JsonRow<'a> {
        period_from: &'a str,
        period_to: &'a str,
        #[serde(flatten)]
        row: &'a TidyParticipant,
    }
    let integers = columns.integers(specs);
    let mut first = true;
    // Parsed a chunk at a time in parallel, written in id order.
    for chunk in ids.chunks(256) {
        let parsed: Vec<Result<Option<TidyParticipant>, String>> =
            chunk.par_iter().map(|id| load(id)).collect();
        for r in parsed {
            let Some(r) = r? else { continue };
            let mut rec = vec![
                r.participant_id.clone(),
                from.clone(),
                to.clone(),
                r.enrolled.clone(),
                r.withdrew.clone().unwrap_or_default(),
                r.withdrawal_reason.clone().unwrap_or_default(),
                r.started.to_string(),
                r.completer.to_string(),
            ];
            rec.extend(
                columns
                    .group_keys
                    .iter()
                    .map(|k| r.groups.get(k).cloned().unwrap_or_default()),
            );
            for ((_, m, n), interval) in &columns.scalars {
                let sc = r
                    .scalars
                    .iter()
                    .find(|(sm, s)| sm == m && &s.name == n)
                    .map(|(_, s)| s);
                rec.push(num(sc.and_then(|s| s.value)));
                if *interval {
                    rec.push(num(sc.and_then(|s| s.lower)));
                    rec.push(num(sc.and_then(|s| s.upper)));
                }
            }
            for (_, m, n) in &columns.texts {
                rec.push(
                    r.texts
                        .iter()
                        .find(|(tm, t)| tm == m && &t.name == n)
                        .map(|(_, t)| t.value.clone())
                        .unwrap_or_default(),
                );
            }
            // Each clinical flag code once (two labs in the diabetes range are one code).
            let clinical: BTreeSet<&str> = r
                .flags
                .iter()
                .filter(|(_, f)| f.severity == cohortpress_metric_api::FlagSeverity::Clinical)
                .map(|(_, f)| f.code.as_str())
                .collect();
            // Of them, those seen at follow-up only (after the day someone who stopped the
            // program left it).
            let at_follow_up: Vec<&str> = clinical
                .iter()
                .copied()
                .filter(|c| {
                    r.flags.iter().filter(|(_, f)| f.code == *c).all(|(m, _)| {
                        r.flags_at_follow_up
                            .iter()
                            .any(|(fm, fc)| fm == m && fc == c)
                    })
                })
                .collect();
            rec.push(clinical.into_iter().collect::<Vec<_>>().join(";"));
            rec.push(at_follow_up.join(";"));
            rec.push(
                r.failures
                    .iter()
                    .map(|(m, _)| m.as_str())
                    .collect::<Vec<_>>()
                    .join(";"),
            );
            rec.extend(
                ROW_COLUMNS
                    .iter()
                    .map(|(_, get)| get(&r).map(|n| n.to_string()).unwrap_or_default()),
            );
            participants.write_record(&rec)?;

            json.write_all(if first { b"\n" } else { b",\n" })?;
            first = false;
            let mut row = serde_json::to_value(JsonRow {
                period_from: &from,
                period_to: &to,
                row: &r,
            })?;
            whole_numbers_as_integers(&mut row, &integers);
            serde_json::to_writer(&mut *json, &row)?;
            for row in &r.weekly_rows {
                weekly.write_record(row)?;
            }
            for row in &r.table_rows {
                tables.write_record(row)?;
            }
        }
    }
    json.write_all(b"\n]\n")?;
    json.flush()?;
    participants.into_inner()?.flush()?;
    weekly.into_inner()?.flush()?;
    tables.into_inner()?.flush()?;
    Ok(())
}

/// `metrics/data-quality.csv`: every diagnostic, by participant, file and line.
pub fn data_quality(diags: &[Diagnostic]) -> Result<Vec<u8>, TidyError> {
    let mut w = crate::csv_out::Writer::from_writer(Vec::new());
    w.write_record([
        "severity",
        "participant_id",
        "file",
        "line",
        "column",
        "field",
        "message",
        "expected",
        "found",
        "hint",
    ])?;
    let mut diags: Vec<&Diagnostic> = diags.iter().collect();
    diags.sort_by(|a, b| (&a.participant, &a.file, a.line).cmp(&(&b.participant, &b.file, b.line)));
    for d in diags {
        w.write_record([
            format!("{:?}", d.severity).to_lowercase(),
            d.participant.clone().unwrap_or_default(),
            d.file.clone(),
            d.line.map(|l| l.to_string()).unwrap_or_default(),
            d.column.map(|l| l.to_string()).unwrap_or_default(),
            d.field.clone().unwrap_or_default(),
            d.message.clone(),
            d.expected.clone().unwrap_or_default(),
            d.found.clone().unwrap_or_default(),
            d.hint.clone().unwrap_or_default(),
        ])?;
    }
    Ok(w.into_inner()?)
}

/// `metrics/group.json`: the group statistics.
pub fn group_json(group: &GroupReport) -> Result<Vec<u8>, TidyError> {
    let mut g = serde_json::to_vec_pretty(group)?;
    g.push(b'\n');
    Ok(g)
}

/// `metrics/datapackage.json`: a description of every tidy file a run writes — the four CSV
/// files, `participants.json` and `group.json` — in the Frictionless Data Package format
/// (Frictionless Data, "Data Package", "Data Resource", "Tabular Data Resource" and "Table
/// Schema" specifications, v1, specs.frictionlessdata.io), so that an analysis tool reads each
/// column with its type, unit and meaning instead of guessing them. The package's profile is
/// `data-package`, not `tabular-data-package`: that profile requires every resource to be a
/// Tabular Data Resource, which the two JSON files are not; each CSV file is still declared a
/// `tabular-data-resource` with its Table Schema, and each JSON file a `data-resource` (format
/// `json`, media type `application/json`) whose description says what it holds.
///
/// # Remarks
/// Written by hand from [`Columns`] and the modules' declared outputs
/// ([`cohortpress_metric_api::ModuleSpec`]): the descriptor is a small JSON document, and no
/// maintained Rust crate writes one. Numbers are `number` (written unrounded, never `NaN` or
/// infinite), counts `integer` (a module's declared counts whose every value is whole), dates `date` (ISO 8601), an empty cell is a missing value, and each file's
/// primary key is declared where one exists. It holds column names only (group keys and module
/// outputs), nothing of any participant's data. `group`: whether the run writes `group.json`
/// (not with `--only`).
pub fn datapackage(
    columns: &Columns,
    specs: &[cohortpress_metric_api::ModuleSpec],
    run: &RunInfo,
    group: bool,
) -> Result<Vec<u8>, TidyError> {
    // What a module declares about one of its outputs: "description (unit)".
    let declared = |module: &str, name: &str| -> String {
        let out = specs
            .iter()
            .find(|s| s.id == module)
            .and_then(|s| s.outputs.iter().find(|o| o.name == name));
        match out {
            Some(o) if !o.unit.is_empty() => format!("{} ({})", o.description, o.unit),
            Some(o) => o.description.clone(),
            None => format!("output `{name}` of module `{module}`"),
        }
    };
    let id = || {
        DpField::required(
            "participant_id",
            "string",
            "participant id (the folder name)",
        )
    };

    let mut fields = vec![
        id(),
        DpField::required("period_from", "date", "first day of the reporting period"),
        DpField::required("period_to", "date", "last day of the reporting period"),
        DpField::required("enrolled", "date", "day of enrolment (profile.yaml)"),
        DpField::new(
            "withdrew",
            "date",
            "day the participant withdrew (profile.yaml); empty when they had not withdrawn by period_to. Rows dated after it are not read, so their figures end there, except the weigh-ins of someone whose withdrawal_reason is stopped_program",
        ),
        DpField {
            constraints: Some(DpConstraints {
                // ICH E9(R1) (2019), treatment-policy strategy; CONSORT 2010 flow diagram.
                r#enum: Some(vec!["consent".into(), "stopped_program".into()]),
                ..Default::default()
            }),
            ..DpField::new(
                "withdrawal_reason",
                "string",
                "what the withdrawal on withdrew was (profile.yaml's withdrawal_reason; empty when withdrew is): consent = withdrew consent to the use of their data, nothing dated after withdrew is read; stopped_program = stopped the program (discontinued the intervention), their weigh-ins after withdrew are read as follow-up and may give them a weight at the period's end (completer), their food, activity, session and lab rows after it are not, and they count as discontinued, not retained",
            )
        },
        DpField::required(
            "started",
            "boolean",
            "has a baseline weight (a weigh-in on or after enrolment): counted in the group report's modified intention-to-treat denominator (false for a participant the group report leaves out because their weigh-ins are another participant folder's; see data-quality.csv)",
        ),
        DpField::required(
            "completer",
            "boolean",
            "started and weighed in within the last 28 days of the period (also someone who withdrew within them: their weigh-ins up to `withdrew` count, while the group report's retention counts them as withdrawn): the group report has their weight at the period's end (outcomes.change_kg and change_percent); for anyone else who started, its primary analysis (baseline carried forward) counts no change and its sensitivity analysis (last observation carried forward) counts their outcomes.change_kg",
        ),
    ];
    for k in &columns.group_keys {
        fields.push(DpField::new(
            format!("group_{k}"),
            "string",
            format!("the participant's `{k}` under `groups:` in profile.yaml"),
        ));
    }
    let integers = columns.integers(specs);
    for ((_, m, n), interval) in &columns.scalars {
        let what = declared(m, n);
        let ty = if integers.contains(&(m.clone(), n.clone())) {
            "integer"
        } else {
            "number"
        };
        fields.push(DpField::new(format!("{m}.{n}"), ty, what.clone()));
        if *interval {
            for (end, word) in [("lower95", "lower"), ("upper95", "upper")] {
                fields.push(DpField::new(
                    format!("{m}.{n}_{end}"),
                    ty,
                    format!("{word} end of the 95 % interval of {m}.{n}: {what}"),
                ));
            }
        }
    }
    for (_, m, n) in &columns.texts {
        // A text output the module declares with the unit `date` is a day, typed `date` when
        // every value written is one (an external module's may not be).
        let is_date = !columns.not_dates.contains(&(m.clone(), n.clone()))
            && specs
                .iter()
                .find(|s| s.id == *m)
                .and_then(|s| s.outputs.iter().find(|o| o.name == *n))
                .is_some_and(|o| o.unit == "date");
        let ty = if is_date { "date" } else { "string" };
        let mut field = DpField::new(format!("{m}.{n}"), ty, declared(m, n));
        if let Some(codes) = columns.codes(specs, m, n) {
            field.constraints = Some(DpConstraints {
                r#enum: Some(codes),
                ..Default::default()
            });
        }
        fields.push(field);
    }
    fields.push(DpField::new(
        "clinical_flags",
        "string",
        "codes of the flags for a licensed clinician's review, separated by `;`",
    ));
    fields.push(DpField::new(
        "clinical_flags_at_follow_up",
        "string",
        "of clinical_flags, the codes seen at follow-up only, separated by `;`: raised by the \
         weigh-ins after withdrew of someone whose withdrawal_reason is stopped_program, and not \
         by their records up to withdrew (the modules are run on both); empty for everyone else",
    ));
    fields.push(DpField::new(
        "module_failures",
        "string",
        "ids of the modules that failed for this participant, separated by `;`",
    ));
    for (name, _) in ROW_COLUMNS {
        let (file, what) = name.split_once("_rows_").unwrap_or((name, ""));
        let description = if what == "in_file" {
            format!(
                "data rows of the participant's {file}.csv as the table reader sees them, rows \
                 dropped for their shape included (not blank lines, a repeated header, title \
                 lines above the header, the date rows of an export that writes each date on a \
                 row of its own, summary rows such as `Average` or a day's `Total`, or rows \
                 dated after withdrew that are not read); for a file refused at its header, the \
                 records below its first line that hold a value; empty when the file is absent \
                 or cannot be read as text"
            )
        } else {
            format!(
                "rows of {file}.csv used by the period's figures: {}, dated up to the \
                 period's end; {file}_rows_in_file minus this is the rows dropped for any \
                 reason, each named in data-quality.csv (capped per kind), and the rows dated \
                 after the period's end (read, used by no figure of the period); 0 when the \
                 file is refused as a whole, empty when it is absent",
                match file {
                    "weights" =>
                        "the weigh-ins kept after duplicates and the rows outside the participant's window are left out",
                    "intake" => "the rows of the days kept, before they are summed by day",
                    _ => "the activity rows kept",
                }
            )
        };
        fields.push(DpField {
            constraints: Some(DpConstraints {
                minimum: Some(0),
                ..Default::default()
            }),
            ..DpField::new(name, "integer", description)
        });
    }
    let positive = |name: &str, description: &str, required: bool| DpField {
        constraints: Some(DpConstraints {
            required: required.then_some(true),
            minimum: Some(1),
            ..Default::default()
        }),
        ..DpField::new(name, "integer", description)
    };

    // What each table holds, from its module's declaration: the file's long form keeps only
    // a table's name, and a table such as `outcomes.trajectory` means nothing without it.
    let tables_declared = format!(
        "table name; the modules' tables, as `module.table: what it holds`: {}",
        specs
            .iter()
            .flat_map(|s| {
                s.outputs
                    .iter()
                    .filter(|o| o.kind == "table")
                    .map(move |o| format!("{}.{}: {}", s.id, o.name, o.description))
            })
            .collect::<Vec<_>>()
            .join("; ")
    );
    // What each weekly series is, from its module's declaration, as for the tables: the file
    // keeps only the series' name.
    let series_declared = format!(
        "series name; the modules' series, as `module.series: what it holds (unit)` (a series \
         computed by day is not in this file): {}",
        specs
            .iter()
            .flat_map(|s| {
                s.outputs
                    .iter()
                    .filter(|o| o.kind == "series")
                    .map(move |o| {
                        if o.unit.is_empty() {
                            format!("{}.{}: {}", s.id, o.name, o.description)
                        } else {
                            format!("{}.{}: {} ({})", s.id, o.name, o.description, o.unit)
                        }
                    })
            })
            .collect::<Vec<_>>()
            .join("; ")
    );
    let mut resources = vec![
        DpResource::new(
            "participants",
            "one row per reported participant for the period",
            fields,
            &["participant_id"],
        ),
        DpResource::new(
            "weekly",
            "every module's weekly series in long form; weeks run Monday to Sunday and \
             week_start is always the Monday, for every module, so one calendar week has one \
             week_start (a week the participant's or the trend's span covers only in part is \
             still dated by its Monday: see value)",
            vec![
                id(),
                DpField::required("module", "string", "module id"),
                DpField::required("series", "string", &series_declared),
                DpField::new("unit", "string", "unit of value, lower95 and upper95"),
                DpField::required(
                    "week_start",
                    "date",
                    "the week's Monday, also for a first or last week only partly covered",
                ),
                DpField::new(
                    "value",
                    "number",
                    "the week's value over its days in the participant's span (enrolment to the period's end or the day they left): the first and last weeks can be partial, and a count then covers fewer than 7 days (for adherence, days_covered of its weekly table in tables.csv); a level (the trend's weight_trend_weekly, whose span runs from the first to the last weigh-in) is its value on the week's last day in that span: the Sunday, or the last weigh-in's day in the last week",
                ),
                DpField::new("lower95", "number", "lower end of its 95 % interval"),
                DpField::new("upper95", "number", "upper end of its 95 % interval"),
            ],
            &["participant_id", "module", "series", "week_start"],
        )
        .joined_to_participants(),
        DpResource::new(
            "tables",
            "every module table in long form, one cell per line",
            vec![
                id(),
                DpField::required("module", "string", "module id"),
                DpField::required("table", "string", &tables_declared),
                positive("row", "row of the participant's table, from 1", true),
                DpField::required(
                    "column",
                    "string",
                    "column name; each row of energy.options also has the column \
                     offered_in_report (not the module's own): yes when the participant's report \
                     offered that option under \"What to try next\" (intake: eating less alone; \
                     walking: walking more alone; combined: some of each, half the intake change \
                     within the floor and walking for the rest, as the report sizes it), else \
                     no. feasible is \
                     the module's verdict by its own limits; the report offers fewer: none in a \
                     report that does not suggest restarting a loss, no intake change under \
                     guidance.min_intake_change_kcal, no walk under guidance.min_walk_minutes, \
                     amounts rounded to 50 kcal and 5 minutes",
                ),
                DpField::new(
                    "unit",
                    "string",
                    "unit of the value, empty when it has none",
                ),
                DpField::new(
                    "value",
                    "string",
                    "the cell: a number written unrounded, or text",
                ),
            ],
            &["participant_id", "module", "table", "row", "column"],
        )
        .joined_to_participants(),
        DpResource::new(
            "data-quality",
            "every problem found in the inputs, by participant, file and line",
            vec![
                DpField {
                    constraints: Some(DpConstraints {
                        required: Some(true),
                        r#enum: Some(vec!["error".into(), "warning".into()]),
                        ..Default::default()
                    }),
                    ..DpField::new(
                        "severity",
                        "string",
                        "error: the file or the participant was left out; warning: a value \
                         was dropped or looks wrong",
                    )
                },
                DpField::new(
                    "participant_id",
                    "string",
                    "participant id; empty for a problem of the program itself",
                ),
                DpField::required("file", "string", "file, relative to the program folder"),
                positive("line", "line in the file, from 1", false),
                positive("column", "column in the line, from 1", false),
                DpField::new("field", "string", "field or column name"),
                DpField::required("message", "string", "what is wrong"),
                DpField::new("expected", "string", "what was expected"),
                DpField::new("found", "string", "what was found"),
                DpField::new("hint", "string", "what to do"),
            ],
            &[],
        ),
        DpResource::json(
            "participants-records",
            "participants.json",
            "the rows of participants.csv as JSON records, one per reported participant \
             (identified): participant_id, period_from, period_to, enrolled, withdrew, \
             withdrawal_reason, started, completer, groups (the profile's groups: keys), scalars and texts (each \
             [module, {name, label, unit, value, and lower and upper where an interval \
             exists}]), flags (every flag a module raised, each [module, {code, severity, \
             message}]: severity clinical for a licensed clinician's review, the codes of \
             clinical_flags in participants.csv, notice for one worth a look, info for \
             information), \
             flags_at_follow_up (of them, [module, code] of each seen at follow-up only, as \
             clinical_flags_at_follow_up in participants.csv), failures (the modules that \
             failed for this participant) and the row counts of participants.csv \
             (weights_rows_in_file, weights_rows_used, intake_rows_in_file, intake_rows_used, \
             activity_rows_in_file, activity_rows_used; null where that file has them empty)",
        ),
    ];
    if group {
        resources.push(DpResource::json(
            "group",
            "group.json",
            "the de-identified group statistics, as the group report prints them: \
             min_cell_size, confidence, methods (how each figure is computed, in words), notes, \
             audit (figures withheld or shown as a range, and the rule that did it), releases \
             (month over month, from the ledger), program (the whole program) and splits (one \
             per group_by key, each with its sections). Every figure is an object: {value} when \
             shown, {suppressed: true} when hidden, with at_least and at_most when it is shown \
             only as the range the rest of the report implies. Counts are people; shares and \
             intervals are %. It holds no names or ids, and no count from 1 to min_cell_size − \
             1 (docs/METHODS.md §5). Retention is retained / started (still in the program); \
             with_outcome_percent is the share of those started with a weight at the time point. \
             adherence holds medians of the participants.csv columns of the same names: \
             activity_minutes_per_week, weigh_ins_per_week and food_log_days_per_week over the \
             period, attendance_to_date_percent since enrolment. The medians of the three rates \
             per week leave out anyone with fewer than 7 days in the period (no rate per week: \
             participants.csv has these empty); their n counts those with a rate",
        ));
    }
    let package = DpPackage {
        profile: "data-package",
        name: "cohortpress-metrics",
        title: "cohortpress tidy metrics",
        // group.json is the one de-identified file of metrics/ (README's outputs, marked S):
        // the descriptor said every file it describes was identified and none went to the
        // sponsor, while describing group.json too.
        description: if group {
            "The tidy metrics of one run (`run`: the tool, program, period, as-of date and module \
             settings that made them, as in the output folder's manifest.json). Every file \
             described here but group.json is identified health data for the program's own \
             staff and analysts, and none of them goes to the sponsor; group.json holds the \
             group report's de-identified statistics as it prints them (audited for small \
             cells) and may go to the sponsor, like the group report."
        } else {
            "The tidy metrics of one run (`run`: the tool, program, period, as-of date and module \
             settings that made them, as in the output folder's manifest.json). Every file \
             described here is identified health data for the program's own staff and \
             analysts; none goes to the sponsor."
        },
        run,
        resources,
    };
    let mut out = serde_json::to_vec_pretty(&package)?;
    out.push(b'\n');
    Ok(out)
}

/// Which run made the tidy files: the same values as the output folder's `manifest.json`, so
/// `metrics/` handed on alone still says where it came from. A custom property of the
/// descriptor (the Data Package specification allows properties of one's own).
#[derive(Debug, Clone, Serialize)]
pub struct RunInfo {
    /// `cohortpress VERSION`.
    pub tool: String,
    /// `program.id`.
    pub program_id: String,
    /// blake3 of `program.yaml` as read.
    pub program_yaml_blake3: String,
    /// blake3 over the template overrides (`built-in` without any).
    pub templates_blake3: String,
    /// First day of the period.
    pub period_from: String,
    /// Last day of the period.
    pub period_to: String,
    /// The day treated as today.
    pub as_of: String,
    /// Every module with its settings, one line each (as in the manifest).
    pub modules: Vec<String>,
}

/// A Data Package descriptor ([`datapackage`]); fields in the order the specification lists them.
#[derive(Serialize)]
struct DpPackage<'a> {
    profile: &'static str,
    name: &'static str,
    title: &'static str,
    description: &'static str,
    run: &'a RunInfo,
    resources: Vec<DpResource>,
}

/// A Data Resource: a CSV file with its Table Schema (a Tabular Data Resource), or a JSON
/// file.
#[derive(Serialize)]
struct DpResource {
    name: &'static str,
    path: String,
    profile: &'static str,
    description: &'static str,
    format: &'static str,
    mediatype: &'static str,
    encoding: &'static str,
    #[serde(skip_serializing_if = "Option::is_none")]
    schema: Option<DpSchema>,
}

impl DpResource {
    fn new(
        name: &'static str,
        description: &'static str,
        fields: Vec<DpField>,
        key: &[&'static str],
    ) -> Self {
        DpResource {
            name,
            path: format!("{name}.csv"),
            profile: "tabular-data-resource",
            description,
            format: "csv",
            mediatype: "text/csv",
            encoding: "utf-8",
            schema: Some(DpSchema {
                fields,
                missing_values: vec![""],
                primary_key: key.to_vec(),
                foreign_keys: Vec::new(),
            }),
        }
    }

    /// The same resource whose `participant_id` is one of `participants.csv`'s (a foreign
    /// key): its rows join to the participant's row, and readers of the format check that.
    fn joined_to_participants(mut self) -> Self {
        if let Some(s) = self.schema.as_mut() {
            s.foreign_keys.push(DpForeignKey {
                fields: vec!["participant_id"],
                reference: DpReference {
                    resource: "participants",
                    fields: vec!["participant_id"],
                },
            });
        }
        self
    }

    /// A JSON file (not tabular: no Table Schema).
    fn json(name: &'static str, path: &str, description: &'static str) -> Self {
        DpResource {
            name,
            path: path.into(),
            profile: "data-resource",
            description,
            format: "json",
            mediatype: "application/json",
            encoding: "utf-8",
            schema: None,
        }
    }
}

/// A Table Schema.
#[derive(Serialize)]
#[serde(rename_all = "camelCase")]
struct DpSchema {
    fields: Vec<DpField>,
    missing_values: Vec<&'static str>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    primary_key: Vec<&'static str>,
    #[serde(skip_serializing_if = "Vec::is_empty")]
    foreign_keys: Vec<DpForeignKey>,
}

/// A Table Schema foreign key: `fields` of this resource are `reference.fields` of another.
#[derive(Serialize)]
struct DpForeignKey {
    fields: Vec<&'static str>,
    reference: DpReference,
}

/// The resource and fields a foreign key points to.
#[derive(Serialize)]
struct DpReference {
    resource: &'static str,
    fields: Vec<&'static str>,
}

/// A Table Schema field descriptor.
#[derive(Serialize)]
struct DpField {
    name: String,
    #[serde(rename = "type")]
    ty: &'static str,
    description: String,
    #[serde(skip_serializing_if = "Option::is_none")]
    constraints: Option<DpConstraints>,
}

impl DpField {
    fn new(name: impl Into<String>, ty: &'static str, description: impl Into<String>) -> Self {
        DpField {
            name: name.into(),
            ty,
            description: description.into(),
            constraints: None,
        }
    }

    fn required(name: &str, ty: &'static str, description: &str) -> Self {
        DpField {
            constraints: Some(DpConstraints {
                required: Some(true),
                ..Default::default()
            }),
            ..DpField::new(name, ty, description)
        }
    }
}

/// A field's constraints.
#[derive(Serialize, Default)]
struct DpConstraints {
    #[serde(skip_serializing_if = "Option::is_none")]
    required: Option<bool>,
    #[serde(skip_serializing_if = "Option::is_none")]
    minimum: Option<i64>,
    #[serde(rename = "enum", skip_serializing_if = "Option::is_none")]
    r#enum: Option<Vec<String>>,
}

#[cfg(test)]
mod tests {
    use super::*;
    use cohortpress_metric_api::TextValue;

    /// A participant of the test module's shape whose only output is the text `name` of module
    /// `module`.
    fn with_one_text(module: &str, name: &str, value: &str) -> TidyParticipant {
        TidyParticipant {
            participant_id: "XP-01".into(),
            enrolled: "2027-03-01".into(),
            withdrew: None,
            withdrawal_reason: None,
            started: true,
            completer: true,
            groups: BTreeMap::new(),
            scalars: vec![],
            texts: vec![(
                module.into(),
                TextValue {
                    name: name.into(),
                    value: value.into(),
                    label: String::new(),
                },
            )],
            weekly_rows: vec![],
            table_rows: vec![],
            flags: vec![],
            flags_at_follow_up: vec![],
            failures: vec![],
            weights_rows_in_file: None,
            weights_rows_used: None,
            intake_rows_in_file: None,
            intake_rows_used: None,
            activity_rows_in_file: None,
            activity_rows_used: None,
        }
    }

    /// A text column gets its declared codes as an `enum` constraint only while every value
    /// written is one of them: an external module that writes a code it did not declare gets
    /// a column described as free text, not a constraint its own file fails.
    #[test]
    fn declared_codes_become_an_enum_only_when_every_value_is_one_of_them() {
        use cohortpress_metric_api::{ModuleSpec, OutputSpec};
        let spec = ModuleSpec {
            id: "ext".into(),
            version: "1.0.0".into(),
            description: String::new(),
            settings: vec![],
            outputs: vec![
                OutputSpec {
                    codes: vec!["up".into(), "down".into()],
                    ..OutputSpec::new("dir", "text", "", "direction")
                },
                OutputSpec::new("note", "text", "", "free text"),
            ],
            requires: vec![],
        };
        let specs = [spec];
        let person = |dir: &str| with_one_text("ext", "dir", dir);
        let mut columns = Columns::new(vec!["ext".into()]);
        columns.observe(&person("up"));
        columns.observe(&person(""));
        assert_eq!(
            columns.codes(&specs, "ext", "dir"),
            Some(vec!["up".to_string(), "down".to_string()])
        );
        assert_eq!(columns.codes(&specs, "ext", "note"), None);
        columns.observe(&person("sideways"));
        assert_eq!(columns.codes(&specs, "ext", "dir"), None);
    }

    /// Before: an external module's text output declared with the unit `date` was typed `date`
    /// in datapackage.json when one participant's value was `2027-3-1` or `+2027-03-01`
    /// (written `'+2027-03-01`): chrono reads both, a Table Schema reader refuses them.
    #[test]
    fn only_iso_days_keep_a_text_column_typed_date() {
        let written = |value: &str| {
            let mut c = Columns::new(vec!["dt".into()]);
            c.observe(&with_one_text("dt", "day", value));
            !c.not_dates.contains(&("dt".into(), "day".into()))
        };
        for day in ["2027-03-01", "0001-01-01", "9999-12-31", "2028-02-29", ""] {
            assert!(written(day), "{day:?}");
        }
        for not_a_day in [
            "2027-3-1",
            "2027-03-1",
            "+2027-03-01",
            "02027-03-01",
            " 2027-03-01",
            "2027-03-01 ",
            "2027-02-30",
            "2027-03-01T00:00",
            "2027/03/01",
        ] {
            assert!(!written(not_a_day), "{not_a_day:?}");
        }
    }
}

//! Tidy metrics for analysis: one row per participant per period (CSV and JSON, units in the
//! column names), weekly series in long form, and the data-quality list.

use crate::diag::Diagnostic;
use crate::group::GroupReport;
use crate::modules::ModuleResults;
use crate::output::Staging;
use crate::run::execute::RunPlan;
use crate::run::partial::TidyRecord;
use cohortpress_metric_api::{Flag, ParticipantData, Scalar, TextValue};
use rayon::prelude::*;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};
use std::io::Write;

/// One participant's tidy metrics.
#[derive(Debug, Clone, Serialize)]
pub struct TidyParticipant {
    /// Participant id (never the name).
    pub participant_id: String,
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
    /// Module failures (module, message).
    pub failures: Vec<(String, String)>,
}

/// Collects a participant's tidy metrics from the module results.
pub fn participant(
    _plan: &RunPlan,
    data: &ParticipantData,
    results: &ModuleResults,
) -> TidyParticipant {
    let mut t = TidyParticipant {
        participant_id: data.profile.id.clone(),
        groups: data.profile.groups.clone(),
        scalars: Vec::new(),
        texts: Vec::new(),
        weekly_rows: Vec::new(),
        table_rows: Vec::new(),
        flags: Vec::new(),
        failures: results
            .failures
            .iter()
            .map(|f| (f.module.clone(), f.message.clone()))
            .collect(),
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
                    p.date.to_string(),
                    num(Some(p.value)),
                    num(p.lower),
                    num(p.upper),
                ]
            }));
        }
        for table in &out.tables {
            for (i, row) in table.rows.iter().enumerate() {
                for (col, cell) in table.columns.iter().zip(row) {
                    let value = match cell {
                        cohortpress_metric_api::Cell::Number(x) => num(Some(*x)),
                        cohortpress_metric_api::Cell::Text(s) => s.clone(),
                        cohortpress_metric_api::Cell::Empty => String::new(),
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
            }
        }
        t.flags
            .extend(out.flags.iter().map(|s| (module.clone(), s.clone())));
    }
    t
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
}

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
            *self
                .scalars
                .entry((self.rank(m), m.clone(), sc.name.clone()))
                .or_default() |= interval;
        }
        for (m, tx) in &t.texts {
            self.texts
                .insert((self.rank(m), m.clone(), tx.name.clone()));
        }
    }
}

/// Writes `metrics/participants.csv`, `metrics/participants.json`, `metrics/weekly.csv`,
/// `metrics/tables.csv`, `metrics/data-quality.csv` and `metrics/group.json` into staging.
///
/// Participants' metrics are not held in memory: they are read back, in id order, from the
/// partial results (`cache/ID.json`) already in staging and streamed into the files, so memory
/// does not grow with the number of participants.
pub fn render(
    plan: &RunPlan,
    columns: &Columns,
    ids: &[String],
    staging: &Staging,
    diags: &[Diagnostic],
    group: &GroupReport,
) -> Result<(), Box<dyn std::error::Error + Send + Sync>> {
    let (from, to) = (plan.period.from.to_string(), plan.period.to.to_string());
    let mut participants =
        crate::csv_out::Writer::from_writer(staging.create("metrics/participants.csv")?);
    let mut json = staging.create("metrics/participants.json")?;
    let mut weekly = crate::csv_out::Writer::from_writer(staging.create("metrics/weekly.csv")?);
    let mut tables = crate::csv_out::Writer::from_writer(staging.create("metrics/tables.csv")?);

    let mut header = vec![
        "participant_id".to_string(),
        "period_from".into(),
        "period_to".into(),
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
    header.push("module_failures".into());
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
    let mut first = true;
    // Parsed a chunk at a time in parallel, written in id order.
    for chunk in ids.chunks(256) {
        let parsed: Vec<Result<Option<TidyParticipant>, String>> = chunk
            .par_iter()
            .map(|id| {
                let bytes = staging
                    .read(&crate::run::partial::cache_path(id))
                    .map_err(|e| e.to_string())?;
                let rec = crate::run::partial::ParticipantRecord::from_bytes(&bytes)
                    .ok_or_else(|| format!("cache/{id}.json: unreadable partial result"))?;
                Ok(rec.tidy.map(TidyRecord::into_tidy))
            })
            .collect();
        for r in parsed {
            let Some(r) = r? else { continue };
            let mut rec = vec![r.participant_id.clone(), from.clone(), to.clone()];
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
            rec.push(clinical.into_iter().collect::<Vec<_>>().join(";"));
            rec.push(
                r.failures
                    .iter()
                    .map(|(m, _)| m.as_str())
                    .collect::<Vec<_>>()
                    .join(";"),
            );
            participants.write_record(&rec)?;

            json.write_all(if first { b"\n" } else { b",\n" })?;
            first = false;
            serde_json::to_writer(
                &mut json,
                &JsonRow {
                    period_from: &from,
                    period_to: &to,
                    row: &r,
                },
            )?;
            for row in &r.weekly_rows {
                weekly.write_record(row)?;
            }
            for row in &r.table_rows {
                tables.write_record(row)?;
            }
        }
    }
    json.write_all(b"\n]\n")?;
    json.finish()?;
    participants
        .into_inner()
        .map_err(|e| e.to_string())?
        .finish()?;
    weekly.into_inner().map_err(|e| e.to_string())?.finish()?;
    tables.into_inner().map_err(|e| e.to_string())?.finish()?;

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
    staging.write("metrics/data-quality.csv", &w.into_inner()?)?;

    let mut g = serde_json::to_vec_pretty(group)?;
    g.push(b'\n');
    staging.write("metrics/group.json", &g)?;
    Ok(())
}

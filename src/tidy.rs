//! Tidy metrics for analysis: one row per participant per period (CSV and JSON, units in the
//! column names), weekly series in long form, and the data-quality list.

use crate::diag::Diagnostic;
use crate::group::GroupReport;
use crate::modules::ModuleResults;
use crate::runner::RunPlan;
use cohortpress_metric_api::{Flag, ParticipantData, Scalar, TextValue};
use serde::Serialize;
use std::collections::BTreeMap;

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

/// Renders `metrics/participants.csv`, `metrics/participants.json`, `metrics/weekly.csv`,
/// `metrics/tables.csv`,
/// `metrics/data-quality.csv` and `metrics/group.json`.
pub fn render(
    plan: &RunPlan,
    rows: &[&TidyParticipant],
    diags: &[Diagnostic],
    group: &GroupReport,
) -> Result<Vec<(String, Vec<u8>)>, Box<dyn std::error::Error + Send + Sync>> {
    let mut files = Vec::new();
    let mut rows: Vec<&&TidyParticipant> = rows.iter().collect();
    rows.sort_by(|a, b| a.participant_id.cmp(&b.participant_id));

    // Column set: the union over participants, in first-seen (module) order.
    let mut group_keys: Vec<String> = Vec::new();
    let mut scalar_cols: Vec<(String, String, bool)> = Vec::new(); // module, name, has interval
    let mut text_cols: Vec<(String, String)> = Vec::new();
    for r in &rows {
        for k in r.groups.keys() {
            if !group_keys.contains(k) {
                group_keys.push(k.clone());
            }
        }
        for (m, s) in &r.scalars {
            let interval = s.lower.is_some() || s.upper.is_some();
            match scalar_cols
                .iter_mut()
                .find(|(cm, cn, _)| cm == m && cn == &s.name)
            {
                Some(c) => c.2 |= interval,
                None => scalar_cols.push((m.clone(), s.name.clone(), interval)),
            }
        }
        for (m, s) in &r.texts {
            if !text_cols.iter().any(|(cm, cn)| cm == m && cn == &s.name) {
                text_cols.push((m.clone(), s.name.clone()));
            }
        }
    }
    group_keys.sort();

    let mut w = csv::Writer::from_writer(Vec::new());
    let mut header = vec![
        "participant_id".to_string(),
        "period_from".into(),
        "period_to".into(),
    ];
    header.extend(group_keys.iter().map(|k| format!("group_{k}")));
    for (m, n, interval) in &scalar_cols {
        header.push(format!("{m}.{n}"));
        if *interval {
            header.push(format!("{m}.{n}_lower95"));
            header.push(format!("{m}.{n}_upper95"));
        }
    }
    header.extend(text_cols.iter().map(|(m, n)| format!("{m}.{n}")));
    header.push("clinical_flags".into());
    header.push("module_failures".into());
    w.write_record(&header)?;
    for r in &rows {
        let mut rec = vec![
            r.participant_id.clone(),
            plan.period.from.to_string(),
            plan.period.to.to_string(),
        ];
        rec.extend(
            group_keys
                .iter()
                .map(|k| r.groups.get(k).cloned().unwrap_or_default()),
        );
        for (m, n, interval) in &scalar_cols {
            let s = r
                .scalars
                .iter()
                .find(|(sm, s)| sm == m && &s.name == n)
                .map(|(_, s)| s);
            rec.push(num(s.and_then(|s| s.value)));
            if *interval {
                rec.push(num(s.and_then(|s| s.lower)));
                rec.push(num(s.and_then(|s| s.upper)));
            }
        }
        for (m, n) in &text_cols {
            rec.push(
                r.texts
                    .iter()
                    .find(|(tm, t)| tm == m && &t.name == n)
                    .map(|(_, t)| t.value.clone())
                    .unwrap_or_default(),
            );
        }
        let clinical: Vec<&str> = r
            .flags
            .iter()
            .filter(|(_, f)| f.severity == cohortpress_metric_api::FlagSeverity::Clinical)
            .map(|(_, f)| f.code.as_str())
            .collect();
        rec.push(clinical.join(";"));
        rec.push(
            r.failures
                .iter()
                .map(|(m, _)| m.as_str())
                .collect::<Vec<_>>()
                .join(";"),
        );
        w.write_record(&rec)?;
    }
    files.push(("metrics/participants.csv".to_string(), w.into_inner()?));

    #[derive(Serialize)]
    struct JsonRow<'a> {
        period_from: String,
        period_to: String,
        #[serde(flatten)]
        row: &'a TidyParticipant,
    }
    let json_rows: Vec<JsonRow<'_>> = rows
        .iter()
        .map(|r| JsonRow {
            period_from: plan.period.from.to_string(),
            period_to: plan.period.to.to_string(),
            row: r,
        })
        .collect();
    let mut j = serde_json::to_vec_pretty(&json_rows)?;
    j.push(b'\n');
    files.push(("metrics/participants.json".to_string(), j));

    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        "participant_id",
        "module",
        "series",
        "unit",
        "week_start",
        "value",
        "lower95",
        "upper95",
    ])?;
    for r in &rows {
        for row in &r.weekly_rows {
            w.write_record(row)?;
        }
    }
    files.push(("metrics/weekly.csv".to_string(), w.into_inner()?));

    let mut w = csv::Writer::from_writer(Vec::new());
    w.write_record([
        "participant_id",
        "module",
        "table",
        "row",
        "column",
        "unit",
        "value",
    ])?;
    for r in &rows {
        for row in &r.table_rows {
            w.write_record(row)?;
        }
    }
    files.push(("metrics/tables.csv".to_string(), w.into_inner()?));

    let mut w = csv::Writer::from_writer(Vec::new());
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
    files.push(("metrics/data-quality.csv".to_string(), w.into_inner()?));

    let mut g = serde_json::to_vec_pretty(group)?;
    g.push(b'\n');
    files.push(("metrics/group.json".to_string(), g));
    Ok(files)
}

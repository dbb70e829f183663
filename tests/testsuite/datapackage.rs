//! `metrics/datapackage.json` describes the tidy CSV files truly: every file's header is its
//! schema's fields in order, and every cell is of its field's type (Frictionless "Table Schema"
//! v1, specs.frictionlessdata.io: the subset of types and constraints the descriptor uses).
//!
//! The checker below is the test's own; the same outputs were also checked once with the
//! reference validator, `frictionless validate` 5.21.0 (frictionless-py), which found them
//! valid (DEVELOPERS.md says how to repeat that).

use serde_json::Value;
use std::collections::BTreeSet;
use std::path::Path;

/// Every problem found in the tidy files of `metrics` against its `datapackage.json`, as
/// `file:line: field: what` lines (empty when valid).
pub fn check_package(metrics: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(metrics.join("datapackage.json")).expect("datapackage.json");
    let package: Value = serde_json::from_str(&text).expect("datapackage.json is JSON");
    assert_eq!(package["profile"], "tabular-data-package");
    let mut problems = Vec::new();
    let mut paths = BTreeSet::new();
    for res in package["resources"].as_array().expect("resources") {
        let path = res["path"].as_str().expect("path");
        paths.insert(path.to_string());
        let schema = &res["schema"];
        let fields = schema["fields"].as_array().expect("fields");
        let missing: Vec<&str> = schema["missingValues"]
            .as_array()
            .expect("missingValues")
            .iter()
            .map(|v| v.as_str().unwrap())
            .collect();
        let mut r = csv::Reader::from_path(metrics.join(path)).expect("csv");
        let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
        let names: Vec<&str> = fields.iter().map(|f| f["name"].as_str().unwrap()).collect();
        if header != names {
            problems.push(format!(
                "{path}: header {header:?} is not the schema's {names:?}"
            ));
            continue;
        }
        let key: Vec<usize> = schema["primaryKey"]
            .as_array()
            .map(|k| {
                k.iter()
                    .map(|n| names.iter().position(|x| Some(*x) == n.as_str()).unwrap())
                    .collect()
            })
            .unwrap_or_default();
        let mut seen = BTreeSet::new();
        for (i, rec) in r.records().enumerate() {
            let rec = rec.unwrap();
            let line = i + 2;
            for (cell, f) in rec.iter().zip(fields) {
                let name = f["name"].as_str().unwrap();
                let c = &f["constraints"];
                if missing.contains(&cell) {
                    if c["required"] == true {
                        problems.push(format!("{path}:{line}: {name}: required but empty"));
                    }
                    continue;
                }
                let ok = match f["type"].as_str().unwrap() {
                    "string" => true,
                    // A finite decimal number: Rust's own parser also takes `inf` and `NaN`,
                    // which the tidy files must never hold.
                    "number" => cell.parse::<f64>().is_ok_and(f64::is_finite),
                    "integer" => cell
                        .parse::<i64>()
                        .is_ok_and(|v| c["minimum"].as_i64().is_none_or(|m| v >= m)),
                    "date" => chrono::NaiveDate::parse_from_str(cell, "%Y-%m-%d").is_ok(),
                    other => panic!("a type the checker does not know: {other}"),
                };
                let in_enum = c["enum"]
                    .as_array()
                    .is_none_or(|e| e.iter().any(|v| v == cell));
                if !ok || !in_enum {
                    problems.push(format!(
                        "{path}:{line}: {name}: `{cell}` is not a valid {}",
                        f["type"]
                    ));
                }
            }
            if !key.is_empty() {
                let k: Vec<&str> = key.iter().map(|&j| &rec[j]).collect::<Vec<_>>();
                if !seen.insert(k.join("\u{1f}")) {
                    problems.push(format!("{path}:{line}: primary key {k:?} repeated"));
                }
            }
        }
    }
    let csvs: BTreeSet<String> = std::fs::read_dir(metrics)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.ends_with(".csv"))
        .collect();
    if csvs != paths {
        problems.push(format!("CSV files {csvs:?}, described {paths:?}"));
    }
    problems
}

/// The checker finds what it is there to find: a number that is not one, an empty required
/// cell, a repeated key and a column the schema does not list.
#[test]
fn the_checker_finds_a_broken_tidy_file() {
    let t = crate::harness::ProgramTest::sample();
    let out = t.run(&["run", "{dir}", "--as-of", "2026-12-01", "--formats", "html"]);
    assert_eq!(out.code, 4, "{}", out.stderr);
    let metrics = t.dir.join("reports/metrics");
    assert_eq!(check_package(&metrics), Vec::<String>::new());

    let weekly = metrics.join("weekly.csv");
    let text = std::fs::read_to_string(&weekly).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    // Line 2: its value becomes NaN; line 3: its participant id empty; line 4 repeats line 5.
    let mut cells: Vec<String> = lines[1].split(',').map(str::to_string).collect();
    cells[5] = "NaN".into();
    lines[1] = cells.join(",");
    lines[2] = format!(",{}", lines[2].split_once(',').unwrap().1);
    lines[3] = lines[4].clone();
    std::fs::write(&weekly, lines.join("\n") + "\n").unwrap();
    let problems = check_package(&metrics);
    assert!(
        problems
            .iter()
            .any(|p| p.starts_with("weekly.csv:2: value: `NaN`")),
        "{problems:?}"
    );
    assert!(
        problems
            .iter()
            .any(|p| p == "weekly.csv:3: participant_id: required but empty"),
        "{problems:?}"
    );
    assert!(
        problems
            .iter()
            .any(|p| p.starts_with("weekly.csv:5: primary key")),
        "{problems:?}"
    );

    std::fs::write(metrics.join("extra.csv"), "a\n1\n").unwrap();
    assert!(
        check_package(&metrics)
            .iter()
            .any(|p| p.starts_with("CSV files"))
    );
}

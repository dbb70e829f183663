//! `metrics/datapackage.json` describes the tidy CSV files truly: every file's header is its
//! schema's fields in order, and every cell is of its field's type (Frictionless "Table Schema"
//! v1, specs.frictionlessdata.io: the subset of types and constraints the descriptor uses).
//!
//! The checker below is the test's own; the same outputs were also checked once with the
//! reference validator, `frictionless validate` 5.21.0 (frictionless-py), which found them
//! valid (DEVELOPERS.md says how to repeat that).

use serde_json::Value;
use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

/// Every problem found in the tidy files of `metrics` against its `datapackage.json`, as
/// `file:line: field: what` lines (empty when valid).
pub fn check_package(metrics: &Path) -> Vec<String> {
    let text = std::fs::read_to_string(metrics.join("datapackage.json")).expect("datapackage.json");
    let package: Value = serde_json::from_str(&text).expect("datapackage.json is JSON");
    // Not `tabular-data-package`: that profile requires every resource to be tabular, and
    // the JSON files are described too (Data Package v1).
    assert_eq!(package["profile"], "data-package");
    let mut problems = Vec::new();
    let mut paths = BTreeSet::new();
    for res in package["resources"].as_array().expect("resources") {
        let path = res["path"].as_str().expect("path");
        paths.insert(path.to_string());
        if res["profile"] != "tabular-data-resource" {
            assert_eq!(res["profile"], "data-resource", "{path}");
            assert_eq!(res["format"], "json", "{path}");
            assert_eq!(res["mediatype"], "application/json", "{path}");
            assert!(
                res["schema"].is_null(),
                "{path}: a Table Schema on a JSON file"
            );
            let text = std::fs::read_to_string(metrics.join(path)).expect(path);
            if serde_json::from_str::<Value>(&text).is_err() {
                problems.push(format!("{path}: not JSON"));
            }
            continue;
        }
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
                    // Table Schema's default date format: YYYY-MM-DD exactly (chrono alone
                    // also reads `2027-3-1`).
                    "date" => {
                        cell.len() == 10
                            && chrono::NaiveDate::parse_from_str(cell, "%Y-%m-%d").is_ok()
                            && cell.bytes().enumerate().all(|(i, c)| {
                                if i == 4 || i == 7 {
                                    c == b'-'
                                } else {
                                    c.is_ascii_digit()
                                }
                            })
                    }
                    // The values the specification reads by default (trueValues, falseValues).
                    "boolean" => ["true", "True", "TRUE", "1", "false", "False", "FALSE", "0"]
                        .contains(&cell),
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
    // Foreign keys: every value of a row's fields is a value of the referenced resource's
    // fields (Table Schema v1, `foreignKeys`).
    let resources = package["resources"].as_array().expect("resources");
    let column = |resource: &str, names: &[&str]| -> Option<(String, Vec<Vec<String>>)> {
        let res = resources.iter().find(|r| r["name"] == resource)?;
        let path = res["path"].as_str()?.to_string();
        let mut r = csv::Reader::from_path(metrics.join(&path)).ok()?;
        let header: Vec<String> = r.headers().ok()?.iter().map(str::to_string).collect();
        let idx: Vec<usize> = names
            .iter()
            .map(|n| header.iter().position(|h| h == n))
            .collect::<Option<_>>()?;
        let values = r
            .records()
            .map(|rec| {
                let rec = rec.unwrap();
                idx.iter().map(|&i| rec[i].to_string()).collect()
            })
            .collect();
        Some((path, values))
    };
    let names_of = |v: &Value| -> Vec<String> {
        match v {
            Value::String(s) => vec![s.clone()],
            Value::Array(a) => a.iter().map(|x| x.as_str().unwrap().to_string()).collect(),
            other => panic!("foreign key fields: {other}"),
        }
    };
    for res in resources {
        for fk in res["schema"]["foreignKeys"]
            .as_array()
            .into_iter()
            .flatten()
        {
            let own = names_of(&fk["fields"]);
            let theirs = names_of(&fk["reference"]["fields"]);
            let own_ref: Vec<&str> = own.iter().map(String::as_str).collect();
            let theirs_ref: Vec<&str> = theirs.iter().map(String::as_str).collect();
            let name = res["name"].as_str().unwrap();
            let target = fk["reference"]["resource"]
                .as_str()
                .expect("reference.resource");
            let (Some((path, rows)), Some((_, allowed))) =
                (column(name, &own_ref), column(target, &theirs_ref))
            else {
                problems.push(format!(
                    "{name}: foreign key {own:?} → {target} {theirs:?} names no such columns"
                ));
                continue;
            };
            let allowed: BTreeSet<Vec<String>> = allowed.into_iter().collect();
            for (i, v) in rows.iter().enumerate() {
                if !allowed.contains(v) {
                    problems.push(format!(
                        "{path}:{}: foreign key {v:?} is not in {target}",
                        i + 2
                    ));
                }
            }
        }
    }
    // Every file of the folder is described, but the descriptor itself.
    let files: BTreeSet<String> = std::fs::read_dir(metrics)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n != "datapackage.json")
        .collect();
    if files != paths {
        problems.push(format!("files {files:?}, described {paths:?}"));
    }
    problems
}

/// The sample program run for the period ending 2026-12-01 (HTML only; exit 4, as the README
/// says: one participant's files are unusable): its `reports/metrics` folder, run once and
/// shared by the tests here, which only read it (a test that changes files works on its own
/// copy, see [`own_copy`]). The run's folder lives under the build's `target/tmp` for the
/// whole test process.
fn sample_metrics() -> &'static Path {
    static RUN: std::sync::OnceLock<(crate::harness::ProgramTest, std::path::PathBuf)> =
        std::sync::OnceLock::new();
    let (_, metrics) = RUN.get_or_init(|| {
        let t = crate::harness::ProgramTest::sample();
        let out = t.run(&["run", "{dir}", "--as-of", "2026-12-01", "--formats", "html"]);
        assert_eq!(out.code, 4, "{}", out.stderr);
        let metrics = t.dir.join("reports/metrics");
        (t, metrics)
    });
    metrics.as_path()
}

/// A copy of the shared metrics folder that a test may change.
fn own_copy(metrics: &Path) -> (tempfile::TempDir, std::path::PathBuf) {
    let tmp = tempfile::Builder::new()
        .prefix("cohortpress-test-")
        .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
        .unwrap();
    let dir = tmp.path().join("metrics");
    crate::harness::copy_tree(metrics, &dir);
    (tmp, dir)
}

/// Every file a run writes in `metrics/` is described by its `datapackage.json` (but the
/// descriptor itself): the weekly series, with what each series is (its module's declaration),
/// `participants.json` and `group.json` as JSON resources. The descriptor listed only the four
/// CSV files, and the weekly file's series only by name.
#[test]
fn every_file_in_the_metrics_folder_is_described() {
    let metrics = sample_metrics();
    let package = read_json(&metrics.join("datapackage.json"));
    let resources = package["resources"].as_array().unwrap();
    let described: BTreeSet<&str> = resources
        .iter()
        .map(|r| r["path"].as_str().unwrap())
        .collect();
    let files: Vec<String> = std::fs::read_dir(metrics)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(files.len() >= 7, "{files:?}");
    for f in files.iter().filter(|f| *f != "datapackage.json") {
        assert!(
            described.contains(f.as_str()),
            "{f} is not described: {described:?}"
        );
    }
    let by_path = |p: &str| resources.iter().find(|r| r["path"] == p).unwrap();
    for p in ["group.json", "participants.json"] {
        let r = by_path(p);
        assert_eq!(r["profile"], "data-resource", "{p}");
        assert_eq!(r["mediatype"], "application/json", "{p}");
        assert!(r["description"].as_str().unwrap().len() > 100, "{p}");
    }
    // Each series in weekly.csv is named with what it holds and its unit.
    let series = by_path("weekly.csv")["schema"]["fields"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["name"] == "series")
        .unwrap()["description"]
        .as_str()
        .unwrap()
        .to_string();
    let mut r = csv::Reader::from_path(metrics.join("weekly.csv")).unwrap();
    let mut seen = BTreeSet::new();
    for rec in r.records() {
        let rec = rec.unwrap();
        seen.insert(format!("{}.{}: ", &rec[1], &rec[2]));
    }
    assert!(seen.len() >= 4, "{seen:?}");
    for s in &seen {
        assert!(series.contains(s.as_str()), "{s} not in {series}");
    }
    assert!(
        series.contains("trend.weight_trend_weekly: ") && series.contains("(kg)"),
        "{series}"
    );
    assert_eq!(check_package(metrics), Vec::<String>::new());
}

fn read_json(path: &Path) -> Value {
    serde_json::from_str(&std::fs::read_to_string(path).unwrap()).unwrap()
}

/// The checker finds what it is there to find: a number that is not one, an empty required
/// cell, a repeated key and a column the schema does not list.
#[test]
fn the_checker_finds_a_broken_tidy_file() {
    let (_tmp, metrics) = own_copy(sample_metrics());
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
            .any(|p| p.starts_with("files"))
    );
}

/// An analyst can tell from `participants.csv` alone who enrolled when, who withdrew, and who
/// the group report counts as started and as a completer (a weigh-in in the period's last 28
/// days), and so repeat its intention-to-treat analysis. The file had none of these: the mean of
/// `outcomes.change_percent` (every participant's last trend weight, however old) is neither the
/// primary (BOCF) nor the completers' figure the group report prints.
#[test]
fn participants_csv_tells_enrolment_withdrawal_and_who_counts_as_a_completer() {
    let metrics = sample_metrics();
    assert_eq!(check_package(metrics), Vec::<String>::new());
    let mut r = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let col = |name: &str| {
        header
            .iter()
            .position(|h| h == name)
            .unwrap_or_else(|| panic!("no column `{name}` in {header:?}"))
    };
    let (id, enrolled, withdrew, started, completer, change) = (
        col("participant_id"),
        col("enrolled"),
        col("withdrew"),
        col("started"),
        col("completer"),
        col("outcomes.change_percent"),
    );
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    let row = |pid: &str| rows.iter().find(|x| &x[id] == pid).unwrap().clone();
    // SG-018 (profile: enrolled 2026-04-01, withdrew 2026-07-27; last weigh-in 2026-07-25).
    let sg018 = row("SG-018");
    assert_eq!(
        (
            &sg018[enrolled],
            &sg018[withdrew],
            &sg018[started],
            &sg018[completer]
        ),
        ("2026-04-01", "2026-07-27", "true", "false")
    );
    // SG-001 (no withdrawal; weighed in on 2026-09-26).
    let sg001 = row("SG-001");
    assert_eq!(
        (&sg001[withdrew], &sg001[started], &sg001[completer]),
        ("", "true", "true")
    );
    // What the withdrawal was, beside its day (profile.yaml's `withdrawal_reason`, default
    // consent), and empty without one.
    let reason = col("withdrawal_reason");
    assert_eq!(reason, withdrew + 1, "{header:?}");
    assert_eq!((&sg018[reason], &sg001[reason]), ("consent", ""));
    // The group report's primary analysis, repeated from the tidy file: a completer's change,
    // everybody else who started counted as no change.
    let bocf: Vec<f64> = rows
        .iter()
        .filter(|x| &x[started] == "true")
        .map(|x| {
            if &x[completer] == "true" {
                x[change].parse::<f64>().unwrap()
            } else {
                0.0
            }
        })
        .collect();
    let mean = bocf.iter().sum::<f64>() / bocf.len() as f64;
    let group: Value =
        serde_json::from_str(&std::fs::read_to_string(metrics.join("group.json")).unwrap())
            .unwrap();
    let bocf_group = &group["program"]["stats"]["weight_change"]["bocf"];
    assert_eq!(bocf_group["n"]["value"], bocf.len() as u64, "{bocf_group}");
    let printed = bocf_group["percent"]["mean"]["value"].as_f64().unwrap();
    assert!((mean - printed).abs() < 0.005, "{mean} vs {printed}");
    let completers = rows.iter().filter(|x| &x[completer] == "true").count();
    assert!(
        completers < bocf.len(),
        "someone in the sample is not a completer"
    );
}

/// `metrics/` is what an analyst is handed, often without the rest of the output folder: its
/// `datapackage.json` says which run made the files (tool version, program and the hash of its
/// program.yaml, period, as-of date, module settings), as `manifest.json` does. It said none
/// of it, so two folders of tidy files from different months or settings looked alike.
#[test]
fn the_datapackage_names_the_run_that_made_the_files() {
    let t = crate::harness::ProgramTest::sample();
    let out = t.run(&["run", "{dir}", "--as-of", "2026-12-01", "--formats", "html"]);
    assert_eq!(out.code, 4, "{}", out.stderr);
    let read = |p: &str| -> Value {
        serde_json::from_str(&std::fs::read_to_string(t.dir.join("reports").join(p)).unwrap())
            .unwrap()
    };
    let package = read("metrics/datapackage.json");
    let manifest = read("manifest.json");
    let run = &package["run"];
    assert_eq!(
        run["tool"],
        format!("cohortpress {}", env!("CARGO_PKG_VERSION"))
    );
    for key in [
        "tool",
        "program_id",
        "program_yaml_blake3",
        "templates_blake3",
        "period_from",
        "period_to",
        "as_of",
        "modules",
    ] {
        assert!(!run[key].is_null(), "no `{key}` in {run}");
        assert_eq!(run[key], manifest[key], "{key}");
    }
    assert_eq!(run["period_from"], "2026-09-01");
    assert_eq!(run["as_of"], "2026-12-01");
}

/// A text output that is a day (the trend's `plateau_onset`) is typed `date`, so a tool
/// reading the descriptor gives the analyst a date, not a string to parse.
#[test]
fn a_day_among_the_text_outputs_is_typed_date() {
    let metrics = sample_metrics();
    assert_eq!(check_package(metrics), Vec::<String>::new());
    let package = read_json(&metrics.join("datapackage.json"));
    let field = |name: &str| {
        package["resources"][0]["schema"]["fields"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["name"] == name)
            .unwrap_or_else(|| panic!("no field {name}"))
            .clone()
    };
    assert_eq!(field("trend.plateau_onset")["type"], "date");
    // Codes stay strings.
    assert_eq!(field("trend.status")["type"], "string");
    let csv = std::fs::read_to_string(metrics.join("participants.csv")).unwrap();
    assert!(
        csv.contains(",2026-06-21,"),
        "SG-001's onset is in the file"
    );
}

/// A text column of codes says which codes it holds: every code found in the sample's
/// `participants.csv` is named in its field's description (`outcomes.weight_change_category`
/// was described only as "weight-change category", the BMI classes as "WHO BMI class now").
#[test]
fn each_code_column_names_its_codes() {
    let metrics = sample_metrics();
    let package = read_json(&metrics.join("datapackage.json"));
    let fields = package["resources"][0]["schema"]["fields"]
        .as_array()
        .unwrap()
        .clone();
    let mut r = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    for name in [
        "trend.status",
        "trend.regain_verdict",
        "outcomes.bmi_category_baseline",
        "outcomes.bmi_category_current",
        "outcomes.weight_change_category",
        "outcomes.current_weight_source",
    ] {
        let i = header.iter().position(|h| h == name).unwrap();
        let description = fields.iter().find(|f| f["name"] == name).unwrap()["description"]
            .as_str()
            .unwrap()
            .to_string();
        let words: BTreeSet<&str> = description
            .split(|c: char| !(c.is_ascii_alphanumeric() || c == '_'))
            .collect();
        let codes: BTreeSet<&str> = rows
            .iter()
            .map(|x| &x[i])
            .filter(|v| !v.is_empty())
            .collect();
        assert!(!codes.is_empty(), "{name}");
        for code in codes {
            assert!(
                words.contains(code),
                "{name}: `{code}` is not named in \"{description}\""
            );
        }
    }
}

/// A text column of codes carries the Table Schema `enum` constraint with every code its module
/// can write (Frictionless Table Schema, `constraints.enum`), so a reader that validates the
/// files refuses a value outside them; before, the codes were named only in the description.
/// Free text (the resting-energy equation is a code too; the plateau onset is a day) is
/// constrained only where it is a list of codes.
#[test]
fn each_code_column_lists_its_codes_as_an_enum_constraint() {
    let metrics = sample_metrics();
    let package = read_json(&metrics.join("datapackage.json"));
    let fields = package["resources"][0]["schema"]["fields"]
        .as_array()
        .unwrap()
        .clone();
    let codes_of = |name: &str| -> Option<Vec<String>> {
        let f = fields.iter().find(|f| f["name"] == name).unwrap();
        f["constraints"]["enum"]
            .as_array()
            .map(|e| e.iter().map(|v| v.as_str().unwrap().to_string()).collect())
    };
    let list = |codes: &[&str]| Some(codes.iter().map(|c| c.to_string()).collect::<Vec<_>>());
    assert_eq!(
        codes_of("trend.status"),
        list(&[
            "losing",
            "plateau",
            "regaining",
            "stable",
            "unclear",
            "insufficient_data"
        ])
    );
    assert_eq!(
        codes_of("trend.regain_verdict"),
        list(&[
            "regaining",
            "not_regaining",
            "no_prior_loss",
            "insufficient_data"
        ])
    );
    assert_eq!(
        codes_of("outcomes.current_weight_source"),
        list(&["trend", "weigh_ins"])
    );
    assert_eq!(
        codes_of("energy.body_fat_source"),
        list(&["measured", "jackson_2002", "none"])
    );
    for name in [
        "outcomes.bmi_category_baseline",
        "outcomes.bmi_category_current",
    ] {
        assert_eq!(
            codes_of(name),
            list(&[
                "underweight",
                "normal",
                "overweight",
                "obesity_class_1",
                "obesity_class_2",
                "obesity_class_3"
            ]),
            "{name}"
        );
    }
    assert_eq!(
        codes_of("outcomes.weight_change_category").unwrap().len(),
        6
    );
    assert!(codes_of("energy.rmr_equation").is_some());
    assert_eq!(codes_of("trend.plateau_onset"), None);
    // And every value written is among them (the checker reads `enum`).
    assert_eq!(check_package(metrics), Vec::<String>::new());
}

/// Counts are typed `integer` and written as whole numbers in both tidy files: a researcher's
/// reader took `trend.weigh_ins_used` (typed `number`) as a float, and `participants.json` held
/// `38.0`. Measures that are not counts stay `number`.
#[test]
fn counts_are_integers_in_the_descriptor_the_csv_and_the_json() {
    let metrics = sample_metrics();
    let package = read_json(&metrics.join("datapackage.json"));
    let fields = package["resources"][0]["schema"]["fields"]
        .as_array()
        .unwrap();
    let ty = |name: &str| {
        fields
            .iter()
            .find(|f| f["name"] == name)
            .unwrap_or_else(|| panic!("{name}"))["type"]
            .as_str()
            .unwrap()
            .to_string()
    };
    for name in [
        "trend.weigh_ins_used",
        "trend.outliers_ignored",
        "energy.logged_days",
        "adherence.sessions_attended",
    ] {
        assert_eq!(ty(name), "integer", "{name}");
    }
    assert_eq!(ty("trend.current_weight_kg"), "number");
    assert_eq!(check_package(metrics), Vec::<String>::new());
    let json = read_json(&metrics.join("participants.json"));
    let mut seen = 0;
    for row in json.as_array().unwrap() {
        for entry in row["scalars"].as_array().unwrap() {
            if entry[0] == "trend" && entry[1]["name"] == "weigh_ins_used" {
                let v = &entry[1]["value"];
                assert!(v.is_u64(), "weigh_ins_used written as {v}");
                seen += 1;
            }
        }
    }
    assert!(seen > 40, "{seen}");
}

/// A participant whose weigh-ins are another folder's (one person enrolled twice, a folder
/// copied) is left out of the group report, so `participants.csv` must not count them as started
/// or as a completer: the column says "counted in the group report's intention-to-treat
/// denominator", and an analyst repeating its figures from the file counted two people more.
#[test]
fn participants_csv_does_not_count_a_folder_the_group_report_leaves_out() {
    let t = crate::harness::ProgramTest::sample();
    std::fs::copy(
        t.dir.join("participants/SG-001/weights.csv"),
        t.dir.join("participants/SG-002/weights.csv"),
    )
    .unwrap();
    let out = t.run(&["run", "{dir}", "--as-of", "2026-12-01", "--formats", "html"]);
    assert_eq!(out.code, 4, "{}", out.stderr);
    assert!(
        out.stderr.contains("left out of the group report"),
        "{}",
        out.stderr
    );
    let metrics = t.dir.join("reports/metrics");
    let mut r = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let (id, started, completer) = (col("participant_id"), col("started"), col("completer"));
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    for pid in ["SG-001", "SG-002"] {
        let x = rows.iter().find(|x| &x[id] == pid).unwrap();
        assert_eq!((&x[started], &x[completer]), ("false", "false"), "{pid}");
    }
    let group: Value =
        serde_json::from_str(&std::fs::read_to_string(metrics.join("group.json")).unwrap())
            .unwrap();
    let n = group["program"]["stats"]["weight_change"]["bocf"]["n"]["value"].clone();
    let started_n = rows.iter().filter(|x| &x[started] == "true").count() as u64;
    assert_eq!(n, started_n);
}

/// The group report's weekly trajectory (mean change from the starting weight by week since
/// enrolment) had nothing behind it in the tidy files: a researcher could neither repeat it nor
/// model it per participant. The outcomes module's `trajectory` table holds each participant's
/// weeks, the descriptor says what it holds, and its mean by week is the group report's.
#[test]
fn the_trajectory_by_week_since_enrolment_is_in_tables_csv_and_repeats_the_group_report() {
    let metrics = sample_metrics();
    assert_eq!(check_package(metrics), Vec::<String>::new());
    let package = read_json(&metrics.join("datapackage.json"));
    let tables = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["name"] == "tables")
        .unwrap();
    let table_field = tables["schema"]["fields"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["name"] == "table")
        .unwrap();
    let described = table_field["description"].as_str().unwrap();
    assert!(
        described.contains(
            "outcomes.trajectory: change from the starting weight by week since enrolment"
        ),
        "{described}"
    );
    assert!(described.contains("outcomes.milestones: "), "{described}");

    let mut r = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let started_col = header.iter().position(|h| h == "started").unwrap();
    let started: BTreeSet<String> = r
        .records()
        .map(Result::unwrap)
        .filter(|x| &x[started_col] == "true")
        .map(|x| x[0].to_string())
        .collect();
    // (participant, row) → column → value, for the outcomes trajectory.
    let mut rows: std::collections::BTreeMap<
        (String, u32),
        std::collections::BTreeMap<String, String>,
    > = Default::default();
    let mut r = csv::Reader::from_path(metrics.join("tables.csv")).unwrap();
    for rec in r.records().map(Result::unwrap) {
        if &rec[1] == "outcomes" && &rec[2] == "trajectory" {
            rows.entry((rec[0].to_string(), rec[3].parse().unwrap()))
                .or_default()
                .insert(rec[4].to_string(), rec[6].to_string());
        }
    }
    assert!(!rows.is_empty());
    // SG-001 enrolled on 2026-04-01: week 0 ends on 2026-04-07, week 1 on 2026-04-14.
    let sg001: Vec<_> = rows.iter().filter(|((p, _), _)| p == "SG-001").collect();
    assert_eq!(sg001[0].1["week"], "0");
    assert_eq!(sg001[0].1["date"], "2026-04-07");
    assert_eq!(sg001[1].1["date"], "2026-04-14");
    // The percent is the weight against the starting weight in participants.csv.
    let by_week = |week: u32| -> Vec<f64> {
        rows.iter()
            .filter(|((p, _), c)| started.contains(p) && c["week"] == week.to_string())
            .map(|(_, c)| c["change_percent"].parse::<f64>().unwrap())
            .collect()
    };
    let group = read_json(&metrics.join("group.json"));
    // group.json says what the weeks and values are (its methods did not).
    let method = group["methods"]["trajectory"].as_str().unwrap_or_default();
    assert!(
        method.contains("weeks are counted from each participant's enrolment")
            && method.contains("trend weight on the week's last day"),
        "{method}"
    );
    let trajectory = group["program"]["stats"]["trajectory"].as_array().unwrap();
    let mut compared = 0;
    for w in trajectory {
        let Some(mean) = w["mean_percent"]["value"].as_f64() else {
            continue;
        };
        let values = by_week(w["week"].as_u64().unwrap() as u32);
        // n is exact while everyone who started is counted, a range after that.
        if let Some(n) = w["n"]["value"].as_u64() {
            assert_eq!(values.len() as u64, n, "week {}", w["week"]);
        }
        let ours = values.iter().sum::<f64>() / values.len() as f64;
        assert!(
            (ours - mean).abs() < 0.005,
            "week {}: {ours} vs {mean}",
            w["week"]
        );
        compared += 1;
    }
    assert!(compared >= 20, "only {compared} weeks shown");
}

#[test]
fn a_completer_who_withdrew_in_the_last_28_days_is_explained_by_the_descriptor() {
    // A participant who withdrew (consent) on 20 May and weighed in before it is a completer
    // of May (weighed in within its last 28 days): `completer` true beside `withdrew`
    // 2026-05-20. The descriptor said only "started and weighed in within the last 28 days",
    // so an analyst took the row for a mistake or dropped the withdrawal.
    let t = crate::harness::ProgramTest::demo(2);
    let profile = t.dir.join("participants/SG-001/profile.yaml");
    let mut text = std::fs::read_to_string(&profile).unwrap();
    text.push_str("withdrew: 2026-05-20\n");
    std::fs::write(&profile, text).unwrap();
    let out = t.dir.parent().unwrap().join("r");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-01",
        "--period",
        "2026-05",
        "--formats",
        "html",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert!(r.code <= 1, "{}", r.stderr);
    let metrics = out.join("metrics");
    let mut csv = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = csv.headers().unwrap().iter().map(str::to_string).collect();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let row = csv
        .records()
        .map(Result::unwrap)
        .find(|x| &x[0] == "SG-001")
        .unwrap();
    assert_eq!(
        (&row[col("withdrew")], &row[col("completer")]),
        ("2026-05-20", "true")
    );
    let package = read_json(&metrics.join("datapackage.json"));
    let fields = package["resources"][0]["schema"]["fields"]
        .as_array()
        .unwrap();
    let completer = fields.iter().find(|f| f["name"] == "completer").unwrap();
    let description = completer["description"].as_str().unwrap();
    assert!(
        description.contains(
            "(also someone who withdrew within them: their weigh-ins up to `withdrew` count, \
             while the group report's retention counts them as withdrawn)"
        ),
        "{description}"
    );
}

/// Per participant and input file, participants.csv says how many data rows the file holds and
/// how many were used, so an export that lost most of its rows shows at once; before, nothing
/// did. On the sample program each dropped row is one warning of data-quality.csv, a file that
/// is absent gives empty cells (not 0), and participants.json and the descriptor agree.
#[test]
fn participants_csv_counts_each_files_rows_in_the_file_and_used() {
    let metrics = sample_metrics();
    assert_eq!(check_package(metrics), Vec::<String>::new());
    let mut r = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let rows: Vec<csv::StringRecord> = r.records().map(Result::unwrap).collect();
    let cell = |pid: &str, name: &str| {
        let c = header.iter().position(|h| h == name).unwrap();
        rows.iter().find(|x| &x[0] == pid).unwrap()[c].to_string()
    };
    let mut dq = csv::Reader::from_path(metrics.join("data-quality.csv")).unwrap();
    let dropped: Vec<(String, String)> = dq
        .records()
        .map(Result::unwrap)
        .filter(|x| x[6].contains("dropped"))
        .map(|x| (x[1].to_string(), x[2].to_string()))
        .collect();
    let mut checked = 0;
    for row in &rows {
        let pid = &row[0];
        for file in ["weights", "intake", "activity"] {
            let in_file = cell(pid, &format!("{file}_rows_in_file"));
            let used = cell(pid, &format!("{file}_rows_used"));
            if in_file.is_empty() {
                assert_eq!(used, "", "{pid} {file}");
                continue;
            }
            let (n, k): (usize, usize) = (in_file.parse().unwrap(), used.parse().unwrap());
            let path = format!("participants/{pid}/{file}.csv");
            let warned = dropped
                .iter()
                .filter(|(p, f)| p == pid && *f == path)
                .count();
            assert_eq!(n - k, warned, "{pid} {file}: {n} in the file, {k} used");
            checked += 1;
        }
    }
    assert!(checked > 140, "{checked}");
    // SG-023's weigh-in dated in the future is dropped; SG-019 has no activity.csv.
    assert_eq!(cell("SG-023", "weights_rows_in_file"), "84");
    assert_eq!(cell("SG-023", "weights_rows_used"), "83");
    assert_eq!(cell("SG-019", "activity_rows_in_file"), "");
    assert_eq!(cell("SG-019", "activity_rows_used"), "");
    let json = read_json(&metrics.join("participants.json"));
    let rec = |pid: &str| {
        json.as_array()
            .unwrap()
            .iter()
            .find(|r| r["participant_id"] == pid)
            .unwrap()
            .clone()
    };
    assert_eq!(rec("SG-023")["weights_rows_in_file"], 84);
    assert_eq!(rec("SG-023")["weights_rows_used"], 83);
    assert!(rec("SG-019")["activity_rows_in_file"].is_null());
    let package = read_json(&metrics.join("datapackage.json"));
    let fields = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["path"] == "participants.csv")
        .unwrap()["schema"]["fields"]
        .clone();
    let field = fields
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["name"] == "intake_rows_used")
        .unwrap();
    assert_eq!(field["type"], "integer");
    assert!(
        field["description"]
            .as_str()
            .unwrap()
            .contains("before they are summed by day"),
        "{field}"
    );
}

/// `*_rows_used` counts the rows the period's figures use. A month re-run later counted the rows
/// dated after the period's end too, which no figure of the period uses (tryout24: January re-run
/// as of 20 February, every figure identical to the run of 2 February, `weights_rows_used`
/// higher by the weigh-ins of 1 to 19 February). The sample program's August, run as of 1
/// September and as of 1 October: the same rows used, though the files hold September's rows.
#[test]
fn rows_used_are_the_rows_of_the_period_whatever_the_run_s_today() {
    let t = crate::harness::ProgramTest::sample();
    let counts = |as_of: &str| {
        let out = format!("out-{as_of}");
        let o = t.run(&[
            "run",
            "{dir}",
            "--period",
            "2026-08",
            "--as-of",
            as_of,
            "--formats",
            "html",
            "--out",
            &out,
        ]);
        assert!([0, 1, 4].contains(&o.code), "{}", o.stderr);
        let mut r =
            csv::Reader::from_path(t.dir.join(&out).join("metrics/participants.csv")).unwrap();
        let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
        let mut m: BTreeMap<(String, String), String> = BTreeMap::new();
        for rec in r.records().map(Result::unwrap) {
            for (h, v) in header.iter().zip(rec.iter()) {
                if h.contains("_rows_") {
                    m.insert((rec[0].to_string(), h.clone()), v.to_string());
                }
            }
        }
        m
    };
    let (sep, oct) = (counts("2026-09-01"), counts("2026-10-01"));
    assert_eq!(sep.len(), oct.len());
    for (key, used) in sep.iter().filter(|(k, _)| k.1.ends_with("_used")) {
        assert_eq!(used, &oct[key], "{key:?}");
    }
    // Not for want of later rows: most weights files hold weigh-ins of September, which the
    // run as of 1 October reads (and the one as of 1 September drops as future).
    let with_september = std::fs::read_dir(t.dir.join("participants"))
        .unwrap()
        .filter(|e| {
            std::fs::read_to_string(e.as_ref().unwrap().path().join("weights.csv"))
                .is_ok_and(|text| text.lines().any(|l| l.starts_with("2026-09-")))
        })
        .count();
    assert!(with_september > 40, "{with_september}");
}

/// Every description in the descriptor reads as one sentence: the row-count columns'
/// descriptions held runs of 18 spaces (a string continued over lines without `\`), which
/// `frictionless describe` and R's `frictionless` print as they are. And the package's own
/// description says which of its files may go to the sponsor: it said every file it describes
/// was identified and none went to the sponsor, while it describes `group.json`, the
/// de-identified group statistics the README marks as sponsor material. Without a group report
/// (`--only`) every file is identified, and the description says so.
#[test]
fn the_descriptors_text_has_no_runs_of_spaces_and_names_the_one_file_for_the_sponsor() {
    fn texts<'a>(v: &'a Value, path: String, out: &mut Vec<(String, &'a str)>) {
        match v {
            Value::String(s) => out.push((path, s)),
            Value::Array(a) => a
                .iter()
                .enumerate()
                .for_each(|(i, x)| texts(x, format!("{path}[{i}]"), out)),
            Value::Object(o) => o
                .iter()
                .for_each(|(k, x)| texts(x, format!("{path}.{k}"), out)),
            _ => {}
        }
    }
    let package = read_json(&sample_metrics().join("datapackage.json"));
    let mut all = Vec::new();
    texts(&package, String::new(), &mut all);
    let spaced: Vec<_> = all.iter().filter(|(_, s)| s.contains("  ")).collect();
    assert!(spaced.is_empty(), "{spaced:#?}");
    let fields = package["resources"][0]["schema"]["fields"]
        .as_array()
        .unwrap();
    let used = fields
        .iter()
        .find(|f| f["name"] == "weights_rows_used")
        .unwrap();
    assert_eq!(
        used["description"],
        "rows of weights.csv used by the period's figures: the weigh-ins kept after duplicates \
         and the rows outside the participant's window are left out, dated up to the period's \
         end; weights_rows_in_file minus this is the rows dropped for any reason, each named in \
         data-quality.csv (capped per kind), and the rows dated after the period's end (read, \
         used by no figure of the period); 0 when the file is refused as a whole, empty when it \
         is absent"
    );
    let description = package["description"].as_str().unwrap();
    assert!(
        package["resources"]
            .as_array()
            .unwrap()
            .iter()
            .any(|r| r["path"] == "group.json")
    );
    assert!(
        description.contains(
            "Every file described here but group.json is identified health data for the \
             program's own staff and analysts, and none of them goes to the sponsor; group.json \
             holds the group report's de-identified statistics as it prints them (audited for \
             small cells) and may go to the sponsor, like the group report."
        ),
        "{description}"
    );

    // A run of hand-picked participants writes no group.json: then every file is identified.
    let t = crate::harness::ProgramTest::demo(2);
    let out = t.dir.parent().unwrap().join("only");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-01",
        "--formats",
        "html",
        "--only",
        "SG-001",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert!(r.code <= 1, "{}", r.stderr);
    let package = read_json(&out.join("metrics/datapackage.json"));
    assert!(!out.join("metrics/group.json").exists());
    assert!(
        package["description"]
            .as_str()
            .unwrap()
            .ends_with("Every file described here is identified health data for the program's own staff and analysts; none goes to the sponsor."),
        "{}",
        package["description"]
    );
}

/// `participants.json`'s `flags` hold every flag the modules raised, with its severity (the
/// sample run has clinical flags, notices and info flags), and the descriptor says so: it
/// said "the flags for a licensed clinician's review", so an analyst counting clinical flags
/// from the JSON counted the notices and info flags too. The clinical ones are those of
/// `participants.csv`'s `clinical_flags`.
#[test]
fn the_descriptor_says_participants_json_flags_are_every_flag_with_its_severity() {
    let metrics = sample_metrics();
    let records = read_json(&metrics.join("participants.json"));
    let mut severities = BTreeSet::new();
    let mut csv = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header: Vec<String> = csv.headers().unwrap().iter().map(str::to_string).collect();
    let col = header.iter().position(|h| h == "clinical_flags").unwrap();
    let clinical_csv: Vec<(String, BTreeSet<String>)> = csv
        .records()
        .map(Result::unwrap)
        .map(|r| {
            let codes = r[col]
                .split(';')
                .filter(|c| !c.is_empty())
                .map(str::to_string);
            (r[0].to_string(), codes.collect())
        })
        .collect();
    for record in records.as_array().unwrap() {
        let mut clinical = BTreeSet::new();
        for flag in record["flags"].as_array().unwrap() {
            let severity = flag[1]["severity"].as_str().unwrap();
            severities.insert(severity.to_string());
            if severity == "clinical" {
                clinical.insert(flag[1]["code"].as_str().unwrap().to_string());
            }
        }
        let id = record["participant_id"].as_str().unwrap();
        let from_csv = &clinical_csv.iter().find(|(p, _)| p == id).unwrap().1;
        assert_eq!(&clinical, from_csv, "{id}");
    }
    assert_eq!(
        severities,
        ["clinical", "info", "notice"]
            .map(String::from)
            .into_iter()
            .collect()
    );
    let package = read_json(&metrics.join("datapackage.json"));
    let resource = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["path"] == "participants.json")
        .unwrap();
    let description = resource["description"].as_str().unwrap();
    assert!(
        description.contains(
            "flags (every flag a module raised, each [module, {code, severity, message}]: \
             severity clinical for a licensed clinician's review, the codes of clinical_flags \
             in participants.csv, notice for one worth a look, info for information)"
        ),
        "{description}"
    );
}

/// `weekly.csv`'s `week_start` is the week's Monday for every module. The trend's
/// `weight_trend_weekly` dated its first week by the first weigh-in's day (49 rows of the sample
/// mid-week), while adherence dated the same week by its Monday, so joining the modules' weekly
/// rows on participant and week_start lost that week.
#[test]
fn weekly_csv_dates_every_modules_week_by_its_monday_so_the_modules_join() {
    use chrono::Datelike;
    let metrics = sample_metrics();
    let mut csv = csv::Reader::from_path(metrics.join("weekly.csv")).unwrap();
    let mut not_monday = Vec::new();
    let mut trend_weeks = BTreeSet::new();
    let mut adherence_weeks = BTreeSet::new();
    for r in csv.records().map(Result::unwrap) {
        let day = chrono::NaiveDate::parse_from_str(&r[4], "%Y-%m-%d").unwrap();
        if day.weekday() != chrono::Weekday::Mon {
            not_monday.push(format!("{} {}.{} {}", &r[0], &r[1], &r[2], &r[4]));
        }
        let key = (r[0].to_string(), r[4].to_string());
        match (&r[1], &r[2]) {
            ("trend", "weight_trend_weekly") => trend_weeks.insert(key),
            ("adherence", "weekly_weigh_ins") => adherence_weeks.insert(key),
            _ => false,
        };
    }
    assert_eq!(not_monday, Vec::<String>::new());
    // Every week of the trend (first to last weigh-in, inside the participant's span) joins a
    // week of adherence (the participant's span).
    assert!(trend_weeks.len() > 1000, "{}", trend_weeks.len());
    let unjoined: Vec<_> = trend_weeks.difference(&adherence_weeks).collect();
    assert!(unjoined.is_empty(), "{unjoined:?}");
    // SG-001's first weigh-in is Wednesday 1 April 2026: that week is the week of Monday
    // 30 March in both modules.
    assert!(trend_weeks.contains(&("SG-001".to_string(), "2026-03-30".to_string())));
    assert!(adherence_weeks.contains(&("SG-001".to_string(), "2026-03-30".to_string())));
    let package = read_json(&metrics.join("datapackage.json"));
    let weekly = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["path"] == "weekly.csv")
        .unwrap();
    assert_eq!(
        weekly["description"],
        "every module's weekly series in long form; weeks run Monday to Sunday and week_start \
         is always the Monday, for every module, so one calendar week has one week_start (a \
         week the participant's or the trend's span covers only in part is still dated by its \
         Monday: see value)"
    );
    let field = |name: &str| {
        weekly["schema"]["fields"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["name"] == name)
            .unwrap()["description"]
            .as_str()
            .unwrap()
            .to_string()
    };
    assert_eq!(
        field("week_start"),
        "the week's Monday, also for a first or last week only partly covered"
    );
    assert!(
        field("value").contains("the Sunday, or the last weigh-in's day in the last week"),
        "{}",
        field("value")
    );
}

/// group.json's adherence medians are over the participants.csv columns of the same names.
/// Its `attendance_percent` was the median of attendance since enrolment, while
/// participants.csv's `adherence.attendance_percent` is the period's (empty for everyone in the
/// sample's September, which offered no session): a researcher recomputing the group's figure
/// from the column of that name found 0 values where group.json said n = 50, median 70 %.
#[test]
fn group_json_adherence_medians_are_named_as_the_participants_columns_they_summarise() {
    let metrics = sample_metrics();
    let mut csv = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
    let header = csv.headers().unwrap().clone();
    let rows: Vec<csv::StringRecord> = csv.records().map(Result::unwrap).collect();
    let group = read_json(&metrics.join("group.json"));
    let adherence = group["program"]["stats"]["adherence"].as_object().unwrap();
    let keys: BTreeSet<&str> = adherence.keys().map(String::as_str).collect();
    assert_eq!(
        keys,
        BTreeSet::from([
            "activity_minutes_per_week",
            "weigh_ins_per_week",
            "food_log_days_per_week",
            "attendance_to_date_percent"
        ])
    );
    let mut shown = 0;
    for (key, line) in adherence {
        let col = header
            .iter()
            .position(|h| h == format!("adherence.{key}"))
            .unwrap_or_else(|| panic!("participants.csv has no column adherence.{key}"));
        let mut values: Vec<f64> = rows
            .iter()
            .filter_map(|r| r[col].parse::<f64>().ok())
            .collect();
        values.sort_by(f64::total_cmp);
        if let Some(n) = line["n"]["value"].as_u64() {
            assert_eq!(values.len() as u64, n, "{key}");
        }
        if let Some(median) = line["median"]["value"].as_f64() {
            let m = values.len();
            let ours = if m % 2 == 1 {
                values[m / 2]
            } else {
                (values[m / 2 - 1] + values[m / 2]) / 2.0
            };
            // Printed rounded: attendance to 5 %, the others to 10 min or 0.5 days at most.
            assert!((ours - median).abs() <= 2.5, "{key}: {ours} vs {median}");
            shown += 1;
        }
    }
    // The sample shows attendance (n = 50, median 70 %); the other medians are withheld.
    assert_eq!(adherence["attendance_to_date_percent"]["n"]["value"], 50);
    assert!(shown >= 1);
    let package = read_json(&metrics.join("datapackage.json"));
    let description = package["resources"]
        .as_array()
        .unwrap()
        .iter()
        .find(|r| r["path"] == "group.json")
        .unwrap()["description"]
        .as_str()
        .unwrap()
        .to_string();
    assert!(
        description.contains(
            "adherence holds medians of the participants.csv columns of the same names: \
             activity_minutes_per_week, weigh_ins_per_week and food_log_days_per_week over the \
             period, attendance_to_date_percent since enrolment."
        ),
        "{description}"
    );
}

/// An analyst joins `weekly.csv` and `tables.csv` to `participants.csv` by `participant_id`;
/// the descriptor now says so as foreign keys, which a reader of the format checks (every id of
/// those files is a participant of `participants.csv`). `data-quality.csv` has none: it also
/// names folders that were left out (the sample's SG-049, without a profile).
#[test]
fn weekly_and_tables_rows_are_joined_to_participants_by_a_foreign_key() {
    let package = read_json(&sample_metrics().join("datapackage.json"));
    let fk = |name: &str| {
        package["resources"]
            .as_array()
            .unwrap()
            .iter()
            .find(|r| r["name"] == name)
            .unwrap()["schema"]["foreignKeys"]
            .clone()
    };
    let expected = serde_json::json!([{
        "fields": ["participant_id"],
        "reference": { "resource": "participants", "fields": ["participant_id"] }
    }]);
    assert_eq!(fk("weekly"), expected);
    assert_eq!(fk("tables"), expected);
    assert!(fk("data-quality").is_null(), "{}", fk("data-quality"));

    // The checker holds the files to them: a weekly row of someone not reported is found.
    let (_tmp, metrics) = own_copy(sample_metrics());
    assert_eq!(check_package(&metrics), Vec::<String>::new());
    let weekly = metrics.join("weekly.csv");
    let text = std::fs::read_to_string(&weekly).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    lines[1] = format!("SG-049,{}", lines[1].split_once(',').unwrap().1);
    std::fs::write(&weekly, lines.join("\n") + "\n").unwrap();
    let problems = check_package(&metrics);
    assert!(
        problems
            .iter()
            .any(|p| p.starts_with("weekly.csv:2: foreign key [\"SG-049\"]")),
        "{problems:?}"
    );
}

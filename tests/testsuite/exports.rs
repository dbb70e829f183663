//! A program made of the files people's tools export, not of our own sample files: weigh-ins
//! with UTC time stamps, semicolons and decimal commas, headers with units and other names,
//! natural activity labels, combined blood pressure, and one intake file without a header row.
//! Built in the test from a generated demo program, so the figures can be compared with the
//! same data written our way.

use crate::harness::ProgramTest;
use chrono::NaiveDate;
use std::fs;
use std::path::Path;

const AS_OF: &str = "2026-10-15";
const PARTICIPANTS: usize = 16;

/// The natural label written for each of the demo's activity codes.
fn natural_label(code: &str, row: usize) -> String {
    match code {
        "cycling_leisure" => "Cycling, leisure".into(),
        "stair_climbing" => "Stairs".into(),
        // 5 km/h = 3.1 mph (1 mile = 1.609344 km): the same 2.8–3.2 mph entry.
        "walking_3mph" if row.is_multiple_of(2) => "walk 5 km/h".into(),
        "walking_3mph" => "Walking 3 mph".into(),
        "walking_brisk_3_5mph" => "brisk walk".into(),
        "strength_training" => "Strength training".into(),
        "swimming_laps_moderate" => "Swim laps".into(),
        "yoga_hatha" => "Yoga".into(),
        "gardening" => "Gardening".into(),
        "dancing" => "Dancing".into(),
        "jogging" => "jog".into(),
        other => other.to_string(),
    }
}

/// Rewrites one participant folder as exports.
fn export_participant(dir: &Path, headerless_intake: bool) {
    let read = |n: &str| fs::read_to_string(dir.join(n)).ok();
    if let Some(w) = read("weights.csv") {
        // `Measured;Weight (kg);Device` (or lb, or a unit column when units are mixed),
        // date-times, decimal commas.
        let mut lines = w.lines();
        let header: Vec<&str> = lines.next().unwrap().split(',').collect();
        let col = |n: &str| header.iter().position(|h| *h == n);
        let (date, weight, unit) = (
            col("date").unwrap(),
            col("weight").unwrap(),
            col("unit").unwrap(),
        );
        let (time, source) = (col("time"), col("source"));
        let rows: Vec<Vec<&str>> = lines.map(|l| l.split(',').collect()).collect();
        let one_unit = rows.iter().all(|r| r[unit] == rows[0][unit]);
        let mut out = if one_unit {
            format!(
                "Measured;Weight ({});Device\n",
                rows.first().map_or("kg", |r| r[unit])
            )
        } else {
            "Measured;Weight;Unit;Device\n".to_string()
        };
        for (i, r) in rows.iter().enumerate() {
            let when = match time.map(|t| r[t]).filter(|t| !t.is_empty()) {
                // A local time with the device's offset: the day as written.
                Some(t) => format!("{}T{t}:00+02:00", r[date]),
                // 05:00–05:59 UTC is 06:00–07:59 in Berlin, the same day all year.
                None => format!("{}T05:{:02}:00Z", r[date], i % 60),
            };
            let value = r[weight].replace('.', ",");
            let src = source.map_or("", |s| r[s]);
            if one_unit {
                out.push_str(&format!("{when};{value};{src}\n"));
            } else {
                out.push_str(&format!("{when};{value};{};{src}\n", r[unit]));
            }
        }
        fs::write(dir.join("weights.csv"), out).unwrap();
    }
    if let Some(a) = read("activity.csv") {
        // Tab-separated, natural labels, `Duration (min)`.
        let mut out = String::from("Date\tExercise\tDuration (min)\tMET\tSteps\n");
        for (i, line) in a.lines().skip(1).enumerate() {
            let f: Vec<&str> = line.split(',').collect();
            out.push_str(&format!(
                "{}\t{}\t{}\t{}\t{}\n",
                f[0],
                natural_label(f[1], i),
                f[2],
                f[3].replace('.', ","),
                f[4]
            ));
        }
        fs::write(dir.join("activity.csv"), out).unwrap();
    }
    if let Some(t) = read("intake.csv") {
        let body: Vec<String> = t.lines().skip(1).map(|l| l.replace(',', ";")).collect();
        let header = t
            .lines()
            .next()
            .unwrap()
            .replace(',', ";")
            .replace("kcal", "Calories");
        let text = if headerless_intake {
            format!("{}\n", body.join("\n"))
        } else {
            format!("{header}\n{}\n", body.join("\n"))
        };
        fs::write(dir.join("intake.csv"), text).unwrap();
    }
    if let Some(l) = read("labs.csv") {
        // Usual spellings with the unit in the value, and one combined blood pressure a date.
        let mut out = String::from("Date;Test;Result\n");
        let mut dates = Vec::new();
        for line in l.lines().skip(1) {
            let f: Vec<&str> = line.split(',').collect();
            let name = match f[1] {
                "hba1c" => "HbA1c",
                "fasting_glucose" => "Fasting glucose",
                other => other,
            };
            out.push_str(&format!(
                "{};{name};{} {}\n",
                f[0],
                f[2].replace('.', ","),
                f[3]
            ));
            if !dates.contains(&f[0]) {
                dates.push(f[0]);
            }
        }
        for d in dates {
            out.push_str(&format!("{d};Blood pressure;128/82 mmHg\n"));
        }
        fs::write(dir.join("labs.csv"), out).unwrap();
    }
}

struct Totals {
    participants_usable: usize,
    weigh_ins: usize,
    activity_minutes: f64,
    labs: usize,
    intake_days: usize,
}

fn totals(dir: &Path) -> (Totals, cohortpress::check::CheckReport) {
    let as_of = NaiveDate::parse_from_str(AS_OF, "%Y-%m-%d").unwrap();
    let report = cohortpress::check::check_program(dir, as_of);
    let mut t = Totals {
        participants_usable: 0,
        weigh_ins: 0,
        activity_minutes: 0.0,
        labs: 0,
        intake_days: 0,
    };
    for p in &report.participants {
        if let Some(d) = &p.data {
            t.participants_usable += 1;
            t.weigh_ins += d.weights.len();
            t.activity_minutes += d.activity.iter().map(|a| a.minutes).sum::<f64>();
            t.labs += d.labs.len();
            t.intake_days += d.intake.len();
        }
    }
    (t, report)
}

#[test]
fn a_program_of_exports_loads_nearly_everything_and_reports_everyone() {
    let t = ProgramTest::from_dir(&crate::harness::repo_root().join("sample-program"));
    // A fresh, defect-free demo program in place of the sample.
    fs::remove_dir_all(&t.dir).unwrap();
    cohortpress::demo::generate(
        &t.dir,
        &cohortpress::demo::DemoOptions {
            participants: PARTICIPANTS,
            seed: 12,
            with_defects: false,
        },
    )
    .unwrap();
    let (ours, _) = totals(&t.dir);
    assert_eq!(ours.participants_usable, PARTICIPANTS);

    let yaml = fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    fs::write(
        t.dir.join("program.yaml"),
        format!(
            "{yaml}\ninput:\n  time_zone: Europe/Berlin\n  columns:\n    weights: {{ Measured: date }}\n"
        ),
    )
    .unwrap();
    let mut ids: Vec<_> = fs::read_dir(t.dir.join("participants"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    ids.sort();
    for (i, dir) in ids.iter().enumerate() {
        export_participant(dir, i == 3);
    }

    let (exp, report) = totals(&t.dir);
    // Every participant is usable; the header-less intake file costs that file only.
    assert_eq!(exp.participants_usable, PARTICIPANTS);
    let errors: Vec<_> = report
        .all_diagnostics()
        .filter(|d| d.severity == cohortpress::diag::Severity::Error)
        .collect();
    assert_eq!(errors.len(), 1, "{errors:#?}");
    assert!(errors[0].file.ends_with("/intake.csv"));
    assert!(
        errors[0].message.starts_with("no header row"),
        "{}",
        errors[0]
    );
    // ≥ 99 % of weigh-in rows and ≥ 95 % of activity minutes are used.
    let weigh_share = exp.weigh_ins as f64 / ours.weigh_ins as f64;
    let minute_share = exp.activity_minutes / ours.activity_minutes;
    assert!(
        weigh_share >= 0.99,
        "{} of {} weigh-ins",
        exp.weigh_ins,
        ours.weigh_ins
    );
    assert!(
        minute_share >= 0.95,
        "{} of {} activity minutes",
        exp.activity_minutes,
        ours.activity_minutes
    );
    // In fact every row is read: labs gain a systolic and a diastolic value per lab date.
    assert_eq!(exp.weigh_ins, ours.weigh_ins);
    assert_eq!(exp.activity_minutes, ours.activity_minutes);
    assert!(exp.labs > ours.labs, "{} labs vs {}", exp.labs, ours.labs);
    assert!(exp.intake_days < ours.intake_days);
    println!(
        "weigh-ins {}/{} ({:.1} %), activity minutes {}/{} ({:.1} %), labs {} (ours {})",
        exp.weigh_ins,
        ours.weigh_ins,
        100.0 * weigh_share,
        exp.activity_minutes,
        ours.activity_minutes,
        100.0 * minute_share,
        exp.labs,
        ours.labs
    );

    // `check` opens with a summary that fits a screen and says how the files were read.
    let out = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(out.code, 4, "{}", out.stdout);
    let head: Vec<&str> = out
        .stdout
        .lines()
        .take_while(|l| !l.ends_with(": usable (1 error)"))
        .collect();
    assert!(head.len() < 40, "{}", out.stdout);
    assert!(
        out.stdout
            .contains("read as semicolon-separated with decimal commas"),
        "{}",
        out.stdout
    );
    assert!(
        out.stdout.contains("read as tab-separated"),
        "{}",
        out.stdout
    );
    assert!(
        out.stdout.contains("UTC times converted to Europe/Berlin"),
        "{}",
        out.stdout
    );

    // Every participant is reported.
    let out = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--quiet",
    ]);
    assert_eq!(out.code, 4, "{}", out.stderr);
    for dir in &ids {
        let id = dir.file_name().unwrap().to_string_lossy();
        let html = t.dir.join(format!("reports/participants/{id}.html"));
        assert!(html.exists(), "no report for {id}: {}", out.stderr);
    }
    let lost = ids[3].file_name().unwrap().to_string_lossy().to_string();
    let html = fs::read_to_string(t.dir.join(format!("reports/participants/{lost}.html"))).unwrap();
    assert!(
        html.contains("without your food log"),
        "the report says what is missing"
    );
}

/// A laboratory export writes a value beyond the assay's range as a bound (`>14.0`). Such a row
/// was dropped as "not a number", and with it the diabetes-range flag for the clinician. Now the
/// flag is raised (every value above 14.0 % is in the diabetes range, ADA Standards of Care 2025
/// §2: from 6.5 %), the report prints the bound as written, and the tidy labs table keeps the
/// qualifier beside the bound.
#[test]
fn a_censored_lab_value_keeps_its_bound_and_its_flag() {
    let prog = ProgramTest::sample();
    let labs = prog.dir.join("participants/SG-002/labs.csv");
    let mut text = fs::read_to_string(&labs).unwrap();
    text.push_str("2026-09-28,hba1c,>14.0,%\n2026-09-28,fasting_glucose,< 5.0 mmol/L,\n");
    fs::write(&labs, text).unwrap();
    let out = prog.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-10-01",
        "--only",
        "SG-002",
        "--out",
        "out",
    ]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    let html = fs::read_to_string(prog.dir.join("out/participants/SG-002.html")).unwrap();
    assert!(
        html.contains("The most recent HbA1c (&gt; 14.0 %, 28 Sep 2026) is in the diabetes range"),
        "no flag with the bound as written"
    );
    assert!(html.contains("&gt; 14.0 %</td>"), "the lab table's bound");
    assert!(
        html.contains("&lt; 5.0 mmol/L</td>"),
        "the lab table's bound"
    );
    assert!(
        !html.contains(">14.0 %</td>"),
        "a bound printed as a number"
    );
    // tables.csv: the qualifier beside the bound, and no estimate derived from it.
    let tables = fs::read_to_string(prog.dir.join("out/metrics/tables.csv")).unwrap();
    let row = |col: &str| -> Vec<String> {
        tables
            .lines()
            .filter(|l| l.starts_with("SG-002,outcomes,labs,") && l.contains(&format!(",{col},")))
            .map(|l| l.rsplit(',').next().unwrap().to_string())
            .collect()
    };
    let tests = row("test");
    let qualifiers = row("qualifier");
    let eag = row("eag_mg_dl");
    let at = |test: &str, value: &str| {
        tests
            .iter()
            .zip(row("value"))
            .zip(&qualifiers)
            .position(|((t, v), _)| t == test && v == value)
            .unwrap_or_else(|| panic!("{test} {value} not in tables.csv"))
    };
    let a1c = at("hba1c", "14");
    assert_eq!(qualifiers[a1c], ">");
    assert_eq!(eag[a1c], "");
    assert_eq!(row("category")[a1c], "diabetes_range");
    let glucose = at("fasting_glucose", "5");
    assert_eq!(qualifiers[glucose], "<");
    // Below 5.0 mmol/L may be normal or below 70 mg/dL (low blood sugar, ADA 2025 §6): no
    // class, not "normal".
    assert_eq!(row("category")[glucose], "recorded");
    assert!(qualifiers.iter().filter(|q| q.is_empty()).count() >= 4);
}

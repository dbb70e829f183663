//! The bundled sample program, end to end through the real binary: what a new user sees after
//! the README's first command.

use crate::harness::{ProgramTest, tree_hashes};
use std::collections::BTreeMap;

fn read_csv(path: &std::path::Path) -> (Vec<String>, Vec<BTreeMap<String, String>>) {
    let mut r = csv::Reader::from_path(path).expect("csv");
    let header: Vec<String> = r.headers().unwrap().iter().map(str::to_string).collect();
    let rows = r
        .records()
        .map(|rec| {
            let rec = rec.unwrap();
            header
                .iter()
                .cloned()
                .zip(rec.iter().map(str::to_string))
                .collect()
        })
        .collect();
    (header, rows)
}

#[test]
fn sample_program_runs_end_to_end() {
    let t = ProgramTest::sample();
    let inputs_before = tree_hashes(&t.dir);
    let out = t.run(&["run", "{dir}", "--as-of", "2026-12-01", "--jobs", "2"]);
    // The sample has planted defects: one folder without a profile is left out (exit 4).
    assert_eq!(out.code, 4, "stderr:\n{}", out.stderr);
    assert!(out.stderr.contains("SG-049"), "{}", out.stderr);
    let reports = t.dir.join("reports");

    // Inputs untouched: every file that was there is byte-identical (only reports/, the
    // publication ledger reports.ledger/ and the lock file were added, beside the inputs).
    let after: Vec<_> = tree_hashes(&t.dir)
        .into_iter()
        .filter(|(p, _)| {
            !p.starts_with("reports/")
                && !p.starts_with(".reports")
                && !p.starts_with("reports.ledger/")
        })
        .collect();
    assert_eq!(after, inputs_before);

    // One private report per usable participant in each format, and the group report.
    // SG-001 to SG-048, then the two added to show the fast-loss and age cautions (after
    // SG-049, the folder without a profile).
    for id in (1..=48).chain(50..=51).map(|i| format!("SG-{i:03}")) {
        for ext in ["html", "pdf"] {
            let f = reports.join(format!("participants/{id}.{ext}"));
            assert!(f.is_file(), "missing {}", f.display());
        }
    }
    assert!(!reports.join("participants/SG-049.html").exists());
    for f in ["group/program.html", "group/program.pdf", "manifest.json"] {
        assert!(reports.join(f).is_file(), "missing {f}");
    }
    // The sample names no follow-up recipient, so no identified list is written.
    assert!(!reports.join("followup").exists());

    // Tidy metrics: one row per usable participant, every module present with units in the
    // column names.
    let (header, rows) = read_csv(&reports.join("metrics/participants.csv"));
    assert_eq!(rows.len(), 50);
    for col in [
        "trend.current_weight_kg",
        "trend.slope_kg_per_week",
        "energy.rmr_kcal_per_day",
        "energy.implied_intake_kcal_per_day",
        "energy.intake_gap_kcal_per_day",
        "adherence.activity_minutes_per_week",
        "outcomes.change_percent",
        "outcomes.bmi_current_kg_m2",
        "outcomes.bmi_category_current",
    ] {
        assert!(header.iter().any(|h| h == col), "no column {col}");
    }
    // Values every participant with weigh-ins must have.
    for r in &rows {
        for col in [
            "outcomes.baseline_weight_kg",
            "energy.rmr_kcal_per_day",
            "trend.weigh_ins_used",
        ] {
            let v: f64 = r[col]
                .parse()
                .unwrap_or_else(|_| panic!("{} {col}: `{}`", r["participant_id"], r[col]));
            assert!(v > 0.0, "{} {col} = {v}", r["participant_id"]);
        }
    }
    // The sample's logs under-report intake (by design, as real logs do): most participants
    // with an intake gap show more eaten than logged.
    let gaps: Vec<f64> = rows
        .iter()
        .filter_map(|r| r["energy.intake_gap_kcal_per_day"].parse().ok())
        .collect();
    assert!(gaps.len() >= 30, "{} gaps", gaps.len());
    let positive = gaps.iter().filter(|g| **g > 0.0).count();
    assert!(
        positive * 3 >= gaps.len() * 2,
        "{positive} of {} gaps positive",
        gaps.len()
    );

    // Every tidy file is what metrics/datapackage.json says it is, column by column.
    let problems = crate::datapackage::check_package(&reports.join("metrics"));
    assert!(problems.is_empty(), "{problems:#?}");

    // What the descriptor says a column is matches what its numbers are (a researcher reads
    // the descriptor, not the code).
    let package: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(reports.join("metrics/datapackage.json")).unwrap(),
    )
    .unwrap();
    let described = |name: &str| -> String {
        package["resources"][0]["schema"]["fields"]
            .as_array()
            .unwrap()
            .iter()
            .find(|f| f["name"] == name)
            .unwrap_or_else(|| panic!("no field {name}"))["description"]
            .as_str()
            .unwrap()
            .to_string()
    };
    // The sample's September is the program's last month, so the forecast runs the
    // default 84 days (forecast_min_days) past it, to 23 Dec 2026, not to the program's end
    // (30 Sep 2026); the participant report says so, and the column's description must too.
    let sg001 = std::fs::read_to_string(reports.join("participants/SG-001.html")).unwrap();
    assert!(sg001.contains("23 Dec 2026"), "SG-001's forecast horizon");
    let forecast = described("energy.forecast_weight_at_end_kg");
    assert!(
        forecast.contains("forecast_min_days after the period's end")
            && !forecast.starts_with("Model weight at program end"),
        "{forecast}"
    );
    // The current weight is the trend at the last weigh-in in the period, not at the period's
    // end: for someone whose last weigh-in is days before the end, the outcomes column equals
    // the trend module's "on the last day with a weigh-in".
    let before_end = rows
        .iter()
        .find(|r| {
            r["outcomes.current_weight_source"] == "trend"
                && r["trend.days_since_last_weigh_in"]
                    .parse::<f64>()
                    .is_ok_and(|d| d >= 3.0)
        })
        .expect("someone whose last weigh-in is days before the period's end");
    assert_eq!(
        before_end["outcomes.current_weight_kg"], before_end["trend.current_weight_kg"],
        "{}",
        before_end["participant_id"]
    );
    // SG-018 left on 27 July, before September began: their report shows only the resting
    // energy, and their tidy row gives no period activity or total energy use either (before,
    // "0" kcal/day of activity and a resting × activity-level total of the days after they
    // left, which a researcher's September means would have counted).
    let left = rows
        .iter()
        .find(|r| r["participant_id"] == "SG-018")
        .expect("SG-018");
    for col in [
        "energy.activity_net_kcal_per_day",
        "energy.tdee_kcal_per_day",
        "energy.tdee_kcal_per_day_lower95",
        "energy.tdee_kcal_per_day_upper95",
    ] {
        assert_eq!(left[col], "", "SG-018 {col}");
    }
    assert!(
        left["energy.rmr_kcal_per_day"]
            .parse::<f64>()
            .is_ok_and(|v| v > 1000.0),
        "SG-018 resting energy `{}`",
        left["energy.rmr_kcal_per_day"]
    );
    let sg018 = std::fs::read_to_string(reports.join("participants/SG-018.html")).unwrap();
    assert!(sg018.contains("before this period began"));
    assert!(!sg018.contains("Total energy use per day"));
    // SG-019 has no activity.csv: their report read "Activity minutes per week 0 (target
    // 150)" and "Activity, beyond resting 0 kcal/day", as if they had done none.
    let sg019 = std::fs::read_to_string(reports.join("participants/SG-019.html")).unwrap();
    assert!(
        sg019.contains("none logged since you joined (target 150)")
            && sg019.contains("No activity has been logged since you joined")
            && sg019.contains(">none logged<"),
        "SG-019's activity"
    );
    assert!(!sg019.contains(">0 (target 150)<"));
    // Someone who logs activity still reads their minutes.
    let sg001 = std::fs::read_to_string(reports.join("participants/SG-001.html")).unwrap();
    assert!(sg001.contains(" (target 150)<") && !sg001.contains("none logged"));
    // weekly.csv's last week of September (Mon 28 Sep) covers 3 days of the period: SG-001's
    // weigh-in count there is over 3 days, not 7, as adherence's weekly table says; the
    // descriptor must tell a researcher averaging weekly counts that weeks can be partial.
    let (_, tables_rows) = read_csv(&reports.join("metrics/tables.csv"));
    let week_row = tables_rows
        .iter()
        .find(|t| {
            t["participant_id"] == "SG-001"
                && t["table"] == "weekly"
                && t["column"] == "week_start"
                && t["value"] == "2026-09-28"
        })
        .expect("SG-001's week of 28 Sep")["row"]
        .clone();
    let covered = tables_rows
        .iter()
        .find(|t| {
            t["participant_id"] == "SG-001"
                && t["table"] == "weekly"
                && t["row"] == week_row
                && t["column"] == "days_covered"
        })
        .expect("days_covered");
    assert_eq!(covered["value"], "3");
    let (_, weekly) = read_csv(&reports.join("metrics/weekly.csv"));
    assert!(weekly.iter().any(|w| w["participant_id"] == "SG-001"
        && w["series"] == "weekly_weigh_ins"
        && w["week_start"] == "2026-09-28"));
    // The weekly weight trend ends at the trend's last point: the current weight (the trend at
    // the last weigh-in), for every participant with one.
    let (_, participants) = read_csv(&reports.join("metrics/participants.csv"));
    let mut compared = 0;
    for p in &participants {
        let Ok(current) = p["trend.current_weight_kg"].parse::<f64>() else {
            continue;
        };
        let last = weekly
            .iter()
            .filter(|w| {
                w["participant_id"] == p["participant_id"] && w["series"] == "weight_trend_weekly"
            })
            .max_by(|a, b| a["week_start"].cmp(&b["week_start"]))
            .expect("a participant with a trend has a weekly trend");
        let v: f64 = last["value"].parse().unwrap();
        assert!(
            (v - current).abs() < 1e-9,
            "{}: {v} vs {current}",
            p["participant_id"]
        );
        let (lo, hi): (f64, f64) = (
            last["lower95"].parse().unwrap(),
            last["upper95"].parse().unwrap(),
        );
        assert!(lo < v && v < hi);
        compared += 1;
    }
    assert!(compared >= 40, "{compared}");
    // The participant report's "Data behind the chart" has the same weeks as weekly.csv: the
    // trend on each Monday-to-Sunday week's last day (they were counted back from the last
    // weigh-in, so the two tables disagreed unless it fell on a Sunday).
    let rows_of = |html: &str| -> Vec<String> {
        let table = &html[html.find(">Week ending</th>").expect("the weekly table")..];
        let table = &table[..table.find("</table>").unwrap()];
        table
            .split("<tr><td>")
            .skip(1)
            .map(|r| r.split("</td><td>").nth(1).unwrap().to_string())
            .collect()
    };
    let from_csv: Vec<String> = weekly
        .iter()
        .filter(|w| w["participant_id"] == "SG-001" && w["series"] == "weight_trend_weekly")
        .map(|w| format!("{:.1}", w["value"].parse::<f64>().unwrap()))
        .collect();
    assert!(from_csv.len() >= 20, "{from_csv:?}");
    assert_eq!(rows_of(&sg001), from_csv);
    let value = package["resources"][1]["schema"]["fields"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["name"] == "value")
        .unwrap()["description"]
        .as_str()
        .unwrap()
        .to_string();
    assert_eq!(package["resources"][1]["name"], "weekly");
    assert!(
        value.contains("partial") && value.contains("days_covered"),
        "{value}"
    );
    let current = described("outcomes.current_weight_kg");
    assert!(
        current.contains("at the last weigh-in in the period")
            && !current.contains("end of the period"),
        "{current}"
    );

    // Module tables in long form: plateaus are assessed, and the sample's adherence drift
    // (by design the commonest story in it) is the commonest decided reading: intake drift is
    // called only when the 95 % interval of the change in implied intake excludes zero, and
    // what the evidence cannot decide is "undetermined".
    let (_, tables) = read_csv(&reports.join("metrics/tables.csv"));
    let readings: Vec<&str> = tables
        .iter()
        .filter(|t| t["table"] == "plateau_assessment" && t["column"] == "classification")
        .map(|t| t["value"].as_str())
        .collect();
    let drift = readings.iter().filter(|r| **r == "intake_drift").count();
    let slowdown = readings
        .iter()
        .filter(|r| **r == "expected_slowdown")
        .count();
    assert!(readings.len() >= 10, "{} plateau readings", readings.len());
    assert!(
        drift > slowdown && drift * 3 >= readings.len(),
        "{drift} of {} readings are intake drift, {slowdown} expected slowdown",
        readings.len()
    );
    assert!(
        tables
            .iter()
            .any(|t| t["table"] == "options" && t["column"] == "kind")
    );

    // Every planted defect is in the data-quality list with its file and line.
    let (_, dq) = read_csv(&reports.join("metrics/data-quality.csv"));
    for (file, line) in [
        ("participants/SG-045/weights.csv", "48"),
        ("participants/SG-042/weights.csv", "39"),
        ("participants/SG-033/weights.csv", "60"),
        ("participants/SG-023/weights.csv", "60"),
        ("participants/SG-032/weights.csv", "34"),
    ] {
        assert!(
            dq.iter().any(|d| d["file"] == file && d["line"] == line),
            "data-quality.csv lacks {file}:{line}"
        );
    }
    assert!(
        dq.iter()
            .any(|d| d["file"].starts_with("participants/SG-049"))
    );

    // No report proposes a change it could not estimate (a participant without recent
    // weigh-ins gets no "eat 0 kcal less" option).
    // SG-001 to SG-048, then the two added to show the fast-loss and age cautions (after
    // SG-049, the folder without a profile).
    for id in (1..=48).chain(50..=51).map(|i| format!("SG-{i:03}")) {
        let html =
            std::fs::read_to_string(reports.join(format!("participants/{id}.html"))).unwrap();
        assert!(
            !html.contains("Eat about 0 kcal"),
            "{id} proposes an empty option"
        );
        assert!(
            !html.contains("Walk about 0 minutes"),
            "{id} proposes an empty option"
        );
    }

    // The group report names no participant.
    let group = std::fs::read_to_string(reports.join("group/program.html")).unwrap();
    // SG-001 to SG-048, then the two added to show the fast-loss and age cautions (after
    // SG-049, the folder without a profile).
    for id in (1..=48).chain(50..=51).map(|i| format!("SG-{i:03}")) {
        assert!(!group.contains(&id), "group report names {id}");
    }
    assert!(
        !group.contains("Ana-Lucía"),
        "group report names a participant"
    );
}

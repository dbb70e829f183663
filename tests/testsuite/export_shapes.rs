//! A corpus of export shapes (`tests/fixtures/export-shapes/`, fictional data): the files that
//! smart scales, phone health apps, spreadsheets, food diaries and clinic systems write. Each
//! file becomes one participant's `weights.csv`, `intake.csv` or `activity.csv` in a program
//! running from 2026-04-01 to 2026-09-30, and the test counts the rows kept against the rows
//! that should be kept, then checks the values read. A file that cannot be read without a
//! guess must be refused with an error (file, line, column), never read silently.

use crate::harness::fixture;
use chrono::NaiveDate;
use cohortpress::diag::{Diagnostic, Severity};
use std::collections::BTreeMap;
use std::fs;

/// (fixture file, rows or days that should be kept, whether the file must be refused).
/// For intake files the count is of days (rows of a day are summed).
const SHAPES: &[(&str, usize, bool)] = &[
    ("weights-scale-kg-in-cell.csv", 4, false),
    ("weights-app-lb-in-cell.csv", 3, false),
    ("weights-stones-and-pounds.csv", 5, false),
    ("weights-unit-column-disagrees.csv", 2, false),
    ("weights-header-unit-brackets.csv", 2, false),
    ("weights-header-unit-stones.csv", 2, false),
    ("weights-excel-serial-1900.csv", 3, false),
    ("weights-excel-serial-1904.csv", 2, false),
    ("weights-excel-serial-unplaceable.csv", 0, true),
    ("weights-health-app-offsets.csv", 3, false),
    ("weights-unix-milliseconds.csv", 3, false),
    ("weights-month-name-dates.csv", 3, false),
    ("weights-day-month-name-dates.csv", 3, false),
    ("weights-german-scale.csv", 3, false),
    ("weights-summary-rows.csv", 2, false),
    ("weights-clinic-quoted-multiline.csv", 3, false),
    ("weights-clinic-us-dates.csv", 3, false),
    ("weights-scale-app-date-rows.csv", 3, false),
    ("weights-ambiguous-slash-dates.csv", 0, true),
    ("weights-two-digit-years.csv", 3, false),
    ("weights-two-digit-years-ambiguous.csv", 0, true),
    ("weights-health-app-metadata-line.csv", 3, false),
    // The date-times under `Time`, with no column named as the date: every row was lost.
    ("weights-scale-time-column-datetimes.csv", 3, false),
    ("weights-spreadsheet-sep-line.csv", 3, false),
    // `"72,500"` could be 72,500 or 72.5: its row only is dropped, with a warning.
    ("weights-spreadsheet-quoted-decimal-commas.csv", 3, false),
    ("intake-food-diary-per-meal.csv", 2, false),
    ("intake-food-diary-with-daily-totals.csv", 2, false),
    ("intake-title-line.csv", 2, false),
    ("intake-kj-semicolon-bom.csv", 2, false),
    ("intake-diary-units-in-cells.csv", 2, false),
    // `Calories consumed` beside `Calories burned`: the file was refused, no `kcal` column.
    ("intake-diary-consumed-burned.csv", 2, false),
    // `Kalorien (kcal)`: refused, no `kcal` column; `="2026-05-01"` (a spreadsheet's text
    // formula): "unreadable date", every row dropped.
    ("intake-spreadsheet-german-text-formulas.csv", 2, false),
    ("weights-spreadsheet-text-formula-dates.csv", 3, false),
    ("activity-hms-durations.csv", 3, false),
    ("activity-minutes-in-cell.csv", 4, false),
    ("activity-start-times.csv", 3, false),
    // `Start Time` and `Workout Type`: refused, no `date` or `activity` column.
    ("activity-workout-start-time.csv", 3, false),
    ("activity-mmss-durations.csv", 3, false),
    // A smart scale's body-composition export in lb, blank rows of delimiters at the end.
    ("weights-scale-lb-body-composition-blank-tail.csv", 5, false),
    ("weights-semicolon-decimal-comma-dotted-dates.csv", 4, false),
    // A spreadsheet saved as Unicode text: UTF-16 with a byte-order mark, tabs, CRLF.
    ("weights-spreadsheet-utf16-tabs.csv", 4, false),
    // `Average` and `Total change` under a date column named `Measured`: the date column,
    // found by its cells, was not found (5 dates of 7 cells), and the file was refused.
    ("weights-summary-below-unnamed-date.csv", 5, false),
    ("weights-clinic-visit-notes-multiline.csv", 4, false),
    ("intake-food-diary-per-item-daily-total.csv", 2, false),
    ("intake-semicolon-decimal-comma-totals.csv", 4, false),
    ("activity-duration-words-total-row.csv", 5, false),
    // `Start`, `End` and no duration: refused for a missing `minutes` column.
    ("activity-start-end-no-duration.csv", 5, false),
    // `Duration (s)`: refused, the unit not understood; then `Start Date` and `End Date`
    // both held dates.
    ("activity-workouts-seconds-start-end.csv", 3, false),
    // A title, an export date and a blank line above a semicolon header: refused for
    // missing columns (one line above the header was allowed, and the title hid the `;`).
    ("weights-title-export-date-semicolon.csv", 3, false),
];

const PROGRAM: &str = "format_version: 1
program: { id: shapes-2026, title: \"Export shapes\", start: 2026-04-01, end: 2026-09-30 }
units: metric
modules: [ {id: trend}, {id: energy}, {id: adherence}, {id: outcomes} ]
";

/// What was read from one shape.
#[derive(Debug, Default)]
struct Got {
    /// (day, time, kg) per weigh-in.
    weights: Vec<(NaiveDate, Option<String>, f64)>,
    /// (day, kcal, protein g) per intake day.
    intake: Vec<(NaiveDate, f64, Option<f64>)>,
    /// (day, activity label, minutes) per activity row.
    activity: Vec<(NaiveDate, String, f64)>,
    /// Problems with the file.
    diags: Vec<Diagnostic>,
}

impl Got {
    fn kept(&self) -> usize {
        self.weights.len() + self.intake.len() + self.activity.len()
    }
    fn errors(&self) -> Vec<&Diagnostic> {
        self.diags
            .iter()
            .filter(|d| d.severity == Severity::Error)
            .collect()
    }
}

fn read_corpus() -> BTreeMap<&'static str, Got> {
    let tmp = tempfile::Builder::new()
        .prefix("cohortpress-shapes-")
        .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
        .unwrap();
    let dir = tmp.path().join("program");
    fs::create_dir_all(dir.join("participants")).unwrap();
    fs::write(dir.join("program.yaml"), PROGRAM).unwrap();
    let mut ids = BTreeMap::new();
    for (i, (file, _, _)) in SHAPES.iter().enumerate() {
        let id = format!("XS-{:02}", i + 1);
        let p = dir.join("participants").join(&id);
        fs::create_dir_all(&p).unwrap();
        fs::write(
            p.join("profile.yaml"),
            format!(
                "id: {id}\nsex: female\nbirth_date: 1980-06-01\nheight: 168 cm\nenrolled: 2026-04-01\n"
            ),
        )
        .unwrap();
        let kind = file.split('-').next().unwrap();
        fs::copy(
            fixture("export-shapes").join(file),
            p.join(format!("{kind}.csv")),
        )
        .unwrap();
        ids.insert(id, *file);
    }
    let as_of = NaiveDate::from_ymd_opt(2026, 10, 15).unwrap();
    let report = cohortpress::check::check_program(&dir, as_of);
    assert!(report.program.is_ok(), "{:#?}", report.program.err());
    let mut out = BTreeMap::new();
    for p in &report.participants {
        let file = ids[&p.id];
        let mut got = Got {
            diags: p.diagnostics.clone(),
            ..Got::default()
        };
        let data = p
            .data
            .as_ref()
            .unwrap_or_else(|| panic!("{file}: {:#?}", p.diagnostics));
        got.weights = data
            .weights
            .iter()
            .map(|w| (w.date, w.time.clone(), w.weight.kg()))
            .collect();
        got.intake = data
            .intake
            .iter()
            .map(|d| (d.date, d.kcal, d.protein_g))
            .collect();
        got.activity = data
            .activity
            .iter()
            .map(|a| (a.date, a.activity.clone(), a.minutes))
            .collect();
        out.insert(file, got);
    }
    out
}

fn d(m: u32, day: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(2026, m, day).unwrap()
}

fn close(a: f64, b: f64) -> bool {
    (a - b).abs() < 1e-9
}

#[test]
fn every_export_shape_keeps_the_rows_it_should_and_refuses_what_it_cannot_read() {
    let got = read_corpus();
    // The table for the report: kept against should-keep, with the problems found.
    println!("| shape | kept | should keep | errors | warnings |");
    println!("|---|---|---|---|---|");
    for (file, should, _) in SHAPES {
        let g = &got[file];
        println!(
            "| {file} | {} | {should} | {} | {} |",
            g.kept(),
            g.errors().len(),
            g.diags.len() - g.errors().len()
        );
    }
    for (file, should, refused) in SHAPES {
        let g = &got[file];
        assert_eq!(g.kept(), *should, "{file}: {:#?}", g.diags);
        if *refused {
            assert_eq!(g.errors().len(), 1, "{file}: {:#?}", g.diags);
            let e = g.errors()[0];
            assert!(e.line.is_some() && e.column.is_some(), "{file}: {e}");
        } else {
            // Columns we do not read (`Meal`, `Notes`, `Source` of a kind we have) are named,
            // and so is a row whose cell and unit column disagree (checked below); nothing else
            // is wrong with these files.
            let other: Vec<_> = g
                .diags
                .iter()
                .filter(|d| !d.message.starts_with("extra column"))
                .filter(|d| !d.message.ends_with("as it cannot say which unit it is in"))
                // The one row that could be read two ways (see SHAPES).
                .filter(|d| {
                    !(*file == "weights-spreadsheet-quoted-decimal-commas.csv"
                        && d.message.starts_with("decimal comma in `weight`")
                        && d.line == Some(4))
                })
                .collect();
            assert!(other.is_empty(), "{file}: {other:#?}");
        }
    }
}

#[test]
fn the_values_read_from_every_export_shape_are_the_ones_written() {
    let got = read_corpus();
    let kg = |file: &str| -> Vec<f64> { got[file].weights.iter().map(|w| w.2).collect() };
    let days = |file: &str| -> Vec<NaiveDate> { got[file].weights.iter().map(|w| w.0).collect() };
    // 1 lb = 0.45359237 kg exactly (international yard and pound agreement, 1959); 1 st = 14 lb.
    const LB: f64 = 0.453_592_37;
    let same = |a: Vec<f64>, b: &[f64]| {
        assert_eq!(a.len(), b.len(), "{a:?} vs {b:?}");
        assert!(
            a.iter().zip(b).all(|(x, y)| close(*x, *y)),
            "{a:?} vs {b:?}"
        );
    };
    same(
        kg("weights-scale-kg-in-cell.csv"),
        &[72.5, 72.3, 72.4, 72.2],
    );
    same(
        kg("weights-app-lb-in-cell.csv"),
        &[160.4 * LB, 160.0 * LB, 159.8 * LB],
    );
    same(
        kg("weights-stones-and-pounds.csv"),
        &[
            198.0 * LB,
            197.0 * LB,
            197.0 * LB,
            196.5 * LB,
            14.1 * 14.0 * LB,
        ],
    );
    same(
        kg("weights-header-unit-brackets.csv"),
        &[160.4 * LB, 160.0 * LB],
    );
    same(
        kg("weights-header-unit-stones.csv"),
        &[14.1 * 14.0 * LB, 14.0 * 14.0 * LB],
    );
    // Serial dates: 46143 is 1 May 2026 from 1900; 44681 is 1 May 2026 from 1904;
    // .3 of a day is 07:12.
    assert_eq!(
        days("weights-excel-serial-1900.csv"),
        [d(5, 1), d(5, 2), d(5, 3)]
    );
    assert_eq!(
        got["weights-excel-serial-1900.csv"].weights[2].1.as_deref(),
        Some("07:12")
    );
    assert_eq!(days("weights-excel-serial-1904.csv"), [d(5, 1), d(5, 2)]);
    // Two weigh-ins on 1 May (morning and evening), local times as written.
    let app = &got["weights-health-app-offsets.csv"].weights;
    assert_eq!(
        app.iter()
            .map(|w| (w.0, w.1.as_deref()))
            .collect::<Vec<_>>(),
        [
            (d(5, 1), Some("07:12")),
            (d(5, 1), Some("19:40")),
            (d(5, 2), Some("07:05"))
        ]
    );
    same(kg("weights-health-app-offsets.csv"), &[72.5, 73.1, 72.4]);
    let timed = &got["weights-scale-time-column-datetimes.csv"].weights;
    assert_eq!(
        timed
            .iter()
            .map(|w| (w.0, w.1.as_deref()))
            .collect::<Vec<_>>(),
        [
            (d(5, 3), Some("06:58")),
            (d(5, 4), Some("07:02")),
            (d(5, 6), Some("06:55"))
        ]
    );
    same(
        kg("weights-scale-time-column-datetimes.csv"),
        &[81.4, 81.0, 80.8],
    );
    // Unix milliseconds: 1777622400000 is 2026-05-01 08:00 UTC, taken on its UTC day (the
    // program sets no time zone).
    let unix = &got["weights-unix-milliseconds.csv"].weights;
    assert_eq!(
        unix.iter()
            .map(|w| (w.0, w.1.as_deref()))
            .collect::<Vec<_>>(),
        [
            (d(5, 1), Some("08:00")),
            (d(5, 2), Some("08:00")),
            (d(5, 3), Some("08:00"))
        ]
    );
    same(kg("weights-unix-milliseconds.csv"), &[72.5, 72.3, 72.4]);
    assert_eq!(
        days("weights-month-name-dates.csv"),
        [d(5, 1), d(5, 2), d(5, 3)]
    );
    assert_eq!(
        days("weights-day-month-name-dates.csv"),
        [d(5, 1), d(5, 2), d(6, 3)]
    );
    assert_eq!(
        days("weights-german-scale.csv"),
        [d(5, 1), d(5, 2), d(5, 13)]
    );
    same(kg("weights-german-scale.csv"), &[72.5, 72.3, 72.0]);
    same(
        kg("weights-title-export-date-semicolon.csv"),
        &[72.5, 72.3, 72.0],
    );
    same(kg("weights-spreadsheet-sep-line.csv"), &[72.5, 72.3, 72.4]);
    same(
        kg("weights-spreadsheet-quoted-decimal-commas.csv"),
        &[72.5, 72.35, 72.1],
    );
    same(kg("weights-summary-rows.csv"), &[72.5, 72.3]);
    same(
        kg("weights-clinic-quoted-multiline.csv"),
        &[198.2 * LB, 196.9 * LB, 195.5 * LB],
    );
    // Date rows above the measurements, 12-hour times, units in the cells.
    let rows = &got["weights-scale-app-date-rows.csv"].weights;
    assert_eq!(
        rows.iter()
            .map(|w| (w.0, w.1.as_deref()))
            .collect::<Vec<_>>(),
        [
            (d(5, 1), Some("07:12")),
            (d(5, 1), Some("21:40")),
            (d(5, 2), Some("07:05"))
        ]
    );
    same(kg("weights-scale-app-date-rows.csv"), &[72.5, 73.1, 72.3]);
    // Month first, as 05/18 shows: 05/04 is 4 May.
    assert_eq!(
        days("weights-clinic-us-dates.csv"),
        [d(5, 4), d(5, 18), d(6, 1)]
    );
    // Two-digit years: month first, as 05/18 shows, in the program's century.
    assert_eq!(
        days("weights-two-digit-years.csv"),
        [d(5, 4), d(5, 18), d(6, 1)]
    );
    same(
        kg("weights-two-digit-years.csv"),
        &[198.2 * LB, 196.9 * LB, 195.5 * LB],
    );
    let e = got["weights-two-digit-years-ambiguous.csv"].errors()[0];
    assert_eq!((e.line, e.column), (Some(2), Some(1)));
    assert_eq!(e.found.as_deref(), Some("`04/05/26`"));
    // A health app's metadata line above the header is skipped; its times are read.
    let meta = &got["weights-health-app-metadata-line.csv"].weights;
    assert_eq!(
        meta.iter()
            .map(|w| (w.0, w.1.as_deref()))
            .collect::<Vec<_>>(),
        [
            (d(5, 1), Some("07:12")),
            (d(5, 2), Some("07:05")),
            (d(5, 3), Some("07:20"))
        ]
    );
    same(
        kg("weights-health-app-metadata-line.csv"),
        &[72.5, 72.3, 72.4],
    );
    // A row whose cell and unit column disagree is dropped, named at its cell; the others stay.
    same(kg("weights-unit-column-disagrees.csv"), &[72.5, 72.3]);
    let e = &got["weights-unit-column-disagrees.csv"].diags[0];
    assert_eq!(
        (e.severity, e.line, e.column),
        (Severity::Warning, Some(3), Some(2))
    );
    assert_eq!(e.found.as_deref(), Some("`160.4 lb`"));
    // The refusals name the cell and both readings.
    let e = got["weights-ambiguous-slash-dates.csv"].errors()[0];
    assert_eq!((e.line, e.column), (Some(2), Some(1)));
    assert_eq!(e.found.as_deref(), Some("`04/05/2026`"));
    let e = got["weights-excel-serial-unplaceable.csv"].errors()[0];
    assert_eq!((e.line, e.column), (Some(2), Some(1)));
    assert!(
        e.message.contains("2009-07-06") && e.message.contains("2013-07-07"),
        "{e}"
    );

    // Intake: meals summed per day; the diary's Total rows not added to them.
    let intake = |file: &str| got[file].intake.clone();
    let meals = vec![
        (d(5, 1), 2090.0, Some(105.0)),
        (d(5, 2), 1080.0, Some(60.0)),
    ];
    assert_eq!(intake("intake-food-diary-per-meal.csv"), meals);
    assert_eq!(intake("intake-food-diary-with-daily-totals.csv"), meals);
    assert_eq!(
        intake("intake-title-line.csv"),
        [(d(5, 1), 1850.0, None), (d(5, 2), 2010.0, None)]
    );
    assert_eq!(
        intake("intake-diary-units-in-cells.csv"),
        [(d(5, 1), 1440.0, Some(65.0)), (d(5, 2), 700.0, Some(42.0))]
    );
    assert_eq!(
        intake("intake-diary-consumed-burned.csv"),
        [(d(5, 1), 1850.0, None), (d(5, 2), 1720.0, None)]
    );
    // kJ / 4.184 = kcal (thermochemical calorie); `7 950` and `8.368` group thousands.
    let kj = intake("intake-kj-semicolon-bom.csv");
    assert!(
        close(kj[0].1, 7950.0 / 4.184) && close(kj[1].1, 8368.0 / 4.184),
        "{kj:?}"
    );
    assert_eq!((kj[0].2, kj[1].2), (Some(80.0), Some(85.5)));
    let de = intake("intake-spreadsheet-german-text-formulas.csv");
    assert_eq!(
        de,
        [(d(5, 1), 1850.0, Some(80.0)), (d(5, 2), 1720.0, Some(75.0))]
    );
    same(
        kg("weights-spreadsheet-text-formula-dates.csv"),
        &[160.4 * LB, 160.0 * LB, 159.6 * LB],
    );

    // Activity durations: clock times, units in the cell, start times.
    let minutes = |file: &str| -> Vec<f64> { got[file].activity.iter().map(|a| a.2).collect() };
    assert_eq!(minutes("activity-hms-durations.csv"), [45.0, 70.0, 30.0]);
    assert_eq!(
        minutes("activity-minutes-in-cell.csv"),
        [45.0, 30.0, 75.0, 60.0]
    );
    assert_eq!(minutes("activity-start-times.csv"), [30.0, 45.0, 32.0]);
    assert_eq!(
        got["activity-workout-start-time.csv"]
            .activity
            .iter()
            .map(|a| (a.0, a.1.as_str(), a.2))
            .collect::<Vec<_>>(),
        [
            (d(5, 1), "Walking", 30.0),
            (d(5, 2), "Yoga", 45.0),
            (d(5, 3), "Walking", 32.0)
        ]
    );
    // `45:00` cannot be 45 hours: the file writes minutes:seconds, `1:05` too.
    let mmss = minutes("activity-mmss-durations.csv");
    assert!(
        mmss.len() == 3
            && close(mmss[0], 45.0)
            && close(mmss[1], 32.5)
            && close(mmss[2], 65.0 / 60.0),
        "{mmss:?}"
    );
    assert_eq!(
        got["activity-hms-durations.csv"].activity[1].1,
        "Cycling, moderate"
    );

    // The second corpus: exports as a programme administrator receives them.
    // Weights (kg) and days of each weigh-in export.
    let weigh_ins: [(&str, Vec<f64>, Vec<NaiveDate>); 5] = [
        (
            "weights-scale-lb-body-composition-blank-tail.csv",
            [201.4, 200.8, 200.2, 199.6, 199.9]
                .map(|lb| lb * LB)
                .to_vec(),
            vec![d(5, 4), d(5, 5), d(5, 7), d(5, 9), d(5, 11)],
        ),
        (
            "weights-semicolon-decimal-comma-dotted-dates.csv",
            vec![84.3, 84.1, 83.9, 84.0],
            vec![d(5, 4), d(5, 5), d(5, 6), d(5, 8)],
        ),
        (
            "weights-spreadsheet-utf16-tabs.csv",
            vec![91.2, 90.6, 90.1, 89.8],
            vec![d(5, 2), d(5, 9), d(5, 16), d(5, 23)],
        ),
        (
            "weights-summary-below-unnamed-date.csv",
            vec![88.4, 87.9, 87.5, 87.6, 87.0],
            vec![d(5, 4), d(5, 11), d(5, 18), d(5, 25), d(6, 1)],
        ),
        (
            "weights-clinic-visit-notes-multiline.csv",
            vec![96.4, 95.1, 94.7, 94.0],
            vec![d(5, 6), d(5, 20), d(6, 3), d(6, 17)],
        ),
    ];
    for (file, want_kg, want_days) in &weigh_ins {
        same(kg(file), want_kg);
        assert_eq!(&days(file), want_days, "{file}");
    }
    // Food items summed per day (190 + 92 + 380 + 80 + 610 + 110 = 1462), the `Daily Total`
    // rows not added to them.
    let items = intake("intake-food-diary-per-item-daily-total.csv");
    assert_eq!(items.len(), 2, "{items:?}");
    assert!(
        close(items[0].1, 1462.0) && close(items[1].1, 806.0),
        "{items:?}"
    );
    assert!(
        close(items[0].2.unwrap(), 74.4) && close(items[1].2.unwrap(), 58.1),
        "{items:?}"
    );
    let semi = intake("intake-semicolon-decimal-comma-totals.csv");
    let kcal: Vec<f64> = semi.iter().map(|x| x.1).collect();
    same(kcal, &[1850.5, 2010.0, 1725.8, 1940.2]);
    let words = minutes("activity-duration-words-total-row.csv");
    same(words, &[45.0, 70.0, 30.0, 32.25, 50.0]);
    // End − start, dated by the start; 23:30 to 00:15 is 45 minutes on 7 May.
    assert_eq!(
        got["activity-start-end-no-duration.csv"]
            .activity
            .iter()
            .map(|a| (a.0, a.2))
            .collect::<Vec<_>>(),
        [
            (d(5, 4), 42.5),
            (d(5, 5), 70.0),
            (d(5, 6), 40.0),
            (d(5, 7), 45.0),
            (d(5, 9), 32.0)
        ]
    );
    // 2700 s = 45 min; the start dates the row.
    assert_eq!(
        got["activity-workouts-seconds-start-end.csv"]
            .activity
            .iter()
            .map(|a| (a.0, a.2))
            .collect::<Vec<_>>(),
        [(d(5, 4), 45.0), (d(5, 5), 40.0), (d(5, 6), 30.0)]
    );
}

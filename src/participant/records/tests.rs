use super::*;
use crate::diag::Severity;
use crate::participant::table::ColumnMap;
use std::sync::Arc;

fn d(y: i32, m: u32, day: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(y, m, day).unwrap()
}

fn window() -> Window {
    Window {
        enrolled: Some(d(2026, 4, 1)),
        withdrew: None,
        follow_up_weigh_ins: false,
        as_of: d(2026, 12, 1),
        reported_from: None,
        height_cm: None,
        high_bmi_checked: false,
        low_bmi_checked: false,
    }
}

fn ctx(file: &str) -> FileCtx {
    FileCtx::new("P1", format!("participants/P1/{file}"))
}

fn weights(text: &str) -> (Vec<WeighIn>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let w = parse_weights(
        text,
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    (w, diags)
}

/// `parse_weights` of `text` in window `w`: the weigh-ins, or `None` when the file is refused,
/// with the diagnostics.
fn read(text: &str, w: &Window) -> (Option<Vec<WeighIn>>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let out = parse_weights(
        text,
        &CsvOptions::default(),
        &ctx("weights.csv"),
        w,
        &mut diags,
    );
    (out, diags)
}

fn only_warnings(diags: &[Diagnostic]) {
    assert!(
        diags.iter().all(|x| x.severity == Severity::Warning),
        "{diags:#?}"
    );
}

#[test]
fn weights_are_read_converted_and_sorted() {
    let (w, diags) = weights(
        "date,weight,unit,time,source\n2026-04-03,160,lb,07:05,home\n2026-04-01,72.5,kg,,clinic\n2026-04-01,72.1,kg,06:30,\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 3);
    assert_eq!((w[0].date, w[0].time.as_deref()), (d(2026, 4, 1), None));
    assert_eq!(w[1].time.as_deref(), Some("06:30"));
    assert_eq!(w[0].source.as_deref(), Some("clinic"));
    // 160 lb × 0.45359237 kg/lb (exact factor, 1959 agreement) = 72.5747792 kg
    assert!((w[2].weight.kg() - 72.574_779_2).abs() < 1e-9);
}

#[test]
fn decimal_comma_in_a_quoted_field_is_read_unless_it_could_group_thousands() {
    // Quoted so that it stays one field, `"72,5"` can only be 72.5 (a thousands group has
    // three digits); it was dropped with a warning.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,\"72,5\",kg\n2026-04-02,72.4,kg\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 2);
    assert!((w[0].weight.kg() - 72.5).abs() < 1e-12);
    // `"72,500"` could be either: named at its cell, and dropped.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,\"72,500\",kg\n2026-04-02,72.4,kg\n");
    assert_eq!(w.len(), 1);
    assert_eq!(diags.len(), 1);
    assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(2)));
    assert!(diags[0].message.contains("decimal comma"), "{}", diags[0]);
    assert!(diags[0].hint.as_deref().unwrap().contains("72.5"));
}

#[test]
fn decimal_comma_with_semicolon_delimiter() {
    // Set in program.yaml or recognised: the comma is then the decimal separator.
    for opts in [
        CsvOptions {
            delimiter: Some(b';'),
            ..Default::default()
        },
        CsvOptions::default(),
    ] {
        let mut diags = Vec::new();
        let c = ctx("weights.csv");
        let w = parse_weights(
            "date;weight;unit\n2026-04-01;72,5;kg\n2026-04-02;72.4;kg\n",
            &opts,
            &c,
            &window(),
            &mut diags,
        )
        .unwrap();
        assert!(diags.is_empty(), "{diags:#?}");
        assert_eq!(w.len(), 2);
        assert_eq!(w[0].weight.kg(), 72.5);
        assert_eq!(w[1].weight.kg(), 72.4);
        let notes = c.take_notes();
        assert_eq!(notes.len(), 1, "{notes:?}");
        let expected = if opts.delimiter.is_some() {
            "read as numbers with decimal commas"
        } else {
            "read as semicolon-separated with decimal commas"
        };
        assert_eq!(notes[0].message, expected);
    }
}

/// Over a thousand rows dropped are counted with the thousands separator, as every other count
/// of rows is (attack18: a three-year activity log of 20-hour days read "1096 rows dropped" in
/// `check`, the log and the participant's report).
#[test]
fn a_thousand_rows_dropped_are_counted_with_a_separator() {
    let mut csv = String::from("timestamp,weight_kg\n");
    for i in 0..1096 {
        csv.push_str(&format!("{},84.2\n", 1_777_622_400_000u64 + i * 86_400_000));
    }
    let (w, diags) = read(&csv, &window());
    assert_eq!(w.as_deref().map(<[WeighIn]>::len), Some(0));
    let errors: Vec<_> = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .collect();
    assert_eq!(errors.len(), 1);
    assert_eq!(
        errors[0].message,
        "no row of the file could be read: 1,096 rows dropped, each named in a warning; the \
         file is not used"
    );
}

/// Rows dropped for their shape count as rows that did not read (attack22): a comma-separated
/// file of weights with decimal commas, `2026-04-10,71,1,kg`, lost every row as "a field too
/// many" with warnings only, and the run ended "with warnings" (exit code 1) without a
/// weigh-in. Now the file is an error, located at the first such row, as for any other file
/// none of whose rows reads.
#[test]
fn a_file_whose_rows_all_have_the_wrong_number_of_fields_is_an_error() {
    let (w, diags) = read(
        "date,weight,unit\n2026-04-10,71,1,kg\n2026-04-11,70,9,kg\n2026-04-12,70,8,kg\n",
        &window(),
    );
    assert_eq!(w.as_deref().map(<[WeighIn]>::len), Some(0));
    let errors = [three_rows_dropped_error(&diags)];
    assert_eq!(errors[0].line, Some(2));
    assert_eq!(
        errors[0].found.as_deref(),
        Some(
            "row has 4 fields but the header has 3; the row is dropped (4 fields: \
             `2026-04-10,71,1,kg`)"
        )
    );
    // Counted with the rows that failed on a value, the first of either named.
    let (w, diags) = read(
        "date,weight,unit\n2026-04-10,71.1,kgs x\n2026-04-11,70,9,kg\n",
        &window(),
    );
    assert_eq!(w.as_deref().map(<[WeighIn]>::len), Some(0));
    let errors: Vec<_> = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .collect();
    assert_eq!(errors.len(), 1, "{diags:#?}");
    assert!(
        errors[0].message.contains(": 2 rows dropped"),
        "{}",
        errors[0]
    );
    assert_eq!(errors[0].line, Some(2));
    // One row read is enough for warnings only.
    let (w, diags) = read(
        "date,weight,unit\n2026-04-10,71,1,kg\n2026-04-11,70.9,kg\n",
        &window(),
    );
    assert_eq!(w.map(|w| w.len()), Some(1));
    only_warnings(&diags);
}

/// Exports joined together, each saved with a byte-order mark (`cat a.csv b.csv`; Excel's
/// "CSV UTF-8" writes one): the second export's header, behind its invisible mark, was "the
/// header of another export" and the whole file was refused; a row behind one lost its date.
/// A mark at the start of a line is not read, with a note.
#[test]
fn byte_order_marks_of_joined_exports_are_not_read() {
    let header = "date,weight,unit";
    let text = format!(
        "\u{feff}{header}\r\n2026-04-10,71.1,kg\r\n\u{feff}{header}\r\n2026-04-11,70.9,kg\r\n\u{feff}2026-04-12,70.8,kg\r\n"
    );
    let mut diags = Vec::new();
    let c = ctx("weights.csv");
    let w =
        parse_weights(&text, &CsvOptions::default(), &c, &window(), &mut diags).expect("usable");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(
        w.iter().map(|x| x.date).collect::<Vec<_>>(),
        [d(2026, 4, 10), d(2026, 4, 11), d(2026, 4, 12)]
    );
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes.contains(
            &"byte-order marks (U+FEFF) at the start of 2 lines (the first on line 3) are not \
              read: files joined together, each saved with its own mark"
                .to_string()
        ),
        "{notes:?}"
    );
}

/// The one error of `diags`, asserted to be the file's "no row could be read" after 3 rows.
fn three_rows_dropped_error(diags: &[Diagnostic]) -> &Diagnostic {
    let errors: Vec<_> = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .collect();
    assert_eq!(errors.len(), 1, "{diags:#?}");
    assert_eq!(
        errors[0].message,
        "no row of the file could be read: 3 rows dropped, each named in a warning; the file \
         is not used"
    );
    errors[0]
}

/// A file none of whose rows reads gives nothing: an error on the file (exit code 4), besides
/// each row's warning; one row read is enough for warnings only.
#[test]
fn a_file_of_which_no_row_reads_is_an_error() {
    let (w, diags) = read(
        "timestamp,weight_kg\n1777622400000,84.2\n1777708800000,84.0\n1777795200000,83.8\n",
        &window(),
    );
    assert_eq!(w.as_deref().map(<[WeighIn]>::len), Some(0));
    let errors = [three_rows_dropped_error(&diags)];
    // At the first dropped row's cell (it had a line only).
    assert_eq!((errors[0].line, errors[0].column), (Some(2), Some(1)));
    assert_eq!(errors[0].file, "participants/P1/weights.csv");
    assert!(
        errors[0]
            .found
            .as_deref()
            .is_some_and(|f| f.contains("unreadable date") && f.contains("1777622400000")),
        "{:?}",
        errors[0].found
    );
    assert_eq!(diags.len(), 4, "{diags:#?}");
    // The same instants read within a program's span (seconds or milliseconds), and ten
    // digits far outside it (`2026050107`, a date with an hour, is 2034 in Unix seconds) not.
    let opts = CsvOptions {
        program_span: Some((d(2026, 4, 1), d(2026, 9, 30))),
        ..CsvOptions::default()
    };
    let mut diags = Vec::new();
    let w = parse_weights(
        "timestamp,weight_kg\n1777622400000,84.2\n1777708800,84.0\n2026050107,83.9\n",
        &opts,
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(
        w.iter().map(|x| x.date).collect::<Vec<_>>(),
        [d(2026, 5, 1), d(2026, 5, 2)]
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(
        diags[0].found.as_deref(),
        Some("`2026050107`"),
        "{diags:#?}"
    );
    // One readable row: the others are warnings only.
    let (w, diags) = read(
        "timestamp,weight_kg\n1777622400000,84.2\n2026-05-02,84.0\n",
        &window(),
    );
    assert_eq!(w.map(|w| w.len()), Some(1));
    only_warnings(&diags);
    assert_eq!(diags.len(), 1, "{diags:#?}");
}

#[test]
fn impossible_weights_are_dropped() {
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-01,0,kg\n2026-04-02,700,kg\n2026-04-03,72,kg\n2026-04-04,20,lb\n",
    );
    assert_eq!(w.len(), 1);
    assert_eq!(diags.len(), 3, "{diags:#?}");
    only_warnings(&diags);
    assert_eq!(
        diags.iter().map(|x| x.line.unwrap()).collect::<Vec<_>>(),
        vec![2, 3, 5]
    );
    assert!(diags[1].message.contains("implausible weight"));
    assert_eq!(diags[1].found.as_deref(), Some("`700` kg"));
    assert_eq!(diags[1].column, Some(2));
}

#[test]
fn pounds_in_a_kg_row_are_converted_with_a_warning() {
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-01,72.0,kg\n2026-04-03,71.8,kg\n2026-04-05,158.0,kg\n2026-04-07,71.5,kg\n",
    );
    assert_eq!(w.len(), 4);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(4));
    assert!(
        diags[0].message.contains("looks like pounds"),
        "{}",
        diags[0]
    );
    // 158 lb × 0.45359237 = 71.66759446 kg
    assert!((w[2].weight.kg() - 71.667_594_46).abs() < 1e-8);
}

/// Three weeks of readings in pounds under `kg` (an app switched units): inside the stretch
/// most neighbours were pounds too, so none was converted, and the trend dropped them all as
/// outliers ("too few recent weigh-ins"). Each is now also compared with the weigh-ins before
/// it, as read, and all are converted with a warning each; the kilograms after the stretch
/// are left alone.
#[test]
fn a_stretch_of_pounds_under_kg_is_converted_reading_by_reading() {
    let mut text = String::from("date,weight,unit\n");
    let day =
        |i: i64| chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap() + chrono::Duration::days(i);
    for i in 0..60_i64 {
        let kg = 90.0 - 0.05 * i as f64;
        let written = if (20..41).contains(&i) {
            kg / 0.453_592_37
        } else {
            kg
        };
        text.push_str(&format!("{},{written:.1},kg\n", day(i)));
    }
    let (w, diags) = weights(&text);
    assert_eq!(w.len(), 60);
    let lines: Vec<u64> = diags.iter().filter_map(|d| d.line).collect();
    assert_eq!(lines, (22..43).collect::<Vec<u64>>(), "{diags:#?}");
    assert!(
        diags
            .iter()
            .all(|d| d.message.contains("looks like pounds"))
    );
    for (i, x) in w.iter().enumerate() {
        let kg = 90.0 - 0.05 * i as f64;
        assert!(
            (x.weight.kg() - kg).abs() < 0.06,
            "day {i}: {}",
            x.weight.kg()
        );
    }
}

/// The first 20 days are someone else's weigh-ins (45 kg), the next 60 this person's (99 kg):
/// each 99 was about 2.2 times the five before it as read, and since those had been turned
/// into 45 kg one after another, every weigh-in to the end of the file was read as pounds and
/// the person reported at 45 kg. A stretch running to the end of the file that holds most of
/// it is read as the height says (see `a_file_of_pounds_under_kg_is_never_taken_for_kilograms`
/// for the other way); pounds for the last weeks of a longer file are still converted.
#[test]
fn a_stretch_to_the_end_of_the_file_is_converted_only_when_it_is_the_smaller_part() {
    let day =
        |i: i64| chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap() + chrono::Duration::days(i);
    let text = |first: i64, kg_of: &dyn Fn(i64) -> f64| {
        let mut text = String::from("date,weight,unit\n");
        for i in 0..first {
            text.push_str(&format!("{},{:.1},kg\n", day(i), kg_of(i)));
        }
        text
    };
    let file = |first: i64, kg_of: &dyn Fn(i64) -> f64| weights(&text(first, kg_of));
    // At 175 cm, 99 kg is a BMI of 32.3 and 45 kg one of 14.7: the stretch is read as written,
    // with a warning at the first of the odd weigh-ins before it.
    let tall = Window {
        height_cm: Some(175.0),
        ..window()
    };
    let mut diags = Vec::new();
    let w = parse_weights(
        &text(80, &|i| if i < 20 { 45.0 } else { 99.0 }),
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &tall,
        &mut diags,
    )
    .expect("usable");
    assert_eq!(w.len(), 80);
    for x in &w[20..] {
        assert_eq!(x.weight.kg(), 99.0, "{}: {diags:#?}", x.date);
    }
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(
        (diags[0].severity, diags[0].line, diags[0].column),
        (Severity::Warning, Some(2), Some(2))
    );
    assert_eq!(
        diags[0].message,
        "the 20 weigh-ins before line 22 (median 45.0 kg) are about 0.45 times the 60 from there to the end of the file (median 99.0 kg), which alone are a likely weight at a height of 175 cm; all are read as written"
    );
    // Without a height nothing tells which part is wrong: the file is not used.
    let mut diags = Vec::new();
    let w = parse_weights(
        &text(80, &|i| if i < 20 { 45.0 } else { 99.0 }),
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none());
    assert_eq!(
        (diags.len(), diags[0].line, diags[0].column),
        (1, Some(22), Some(2))
    );
    assert!(
        diags[0].message.starts_with("the weigh-ins from line 22 to the end of the file (60 of 80, median 99.0 kg as written) are about 2.20 times the 20 before them (median 45.0 kg)"),
        "{}",
        diags[0]
    );
    assert!(
        diags[0].message.ends_with(
            "and the profile gives no height to tell which is right; the file is not used"
        ),
        "{}",
        diags[0]
    );
    // 50 days in kg, then 20 in pounds to the end: converted, each with a warning.
    let (w, diags) = file(70, &|i| {
        let kg = 90.0 - 0.05 * i as f64;
        if i >= 50 { kg / 0.453_592_37 } else { kg }
    });
    for (i, x) in w.iter().enumerate() {
        let kg = 90.0 - 0.05 * i as f64;
        assert!(
            (x.weight.kg() - kg).abs() < 0.06,
            "day {i}: {}",
            x.weight.kg()
        );
    }
    assert_eq!(diags.len(), 20, "{diags:#?}");
}

/// A whole file of pounds under `kg` was read as kilograms without a word: a 165 cm woman of
/// about 74 kg at 161–165 kg. The height tells: at 160 cm, as kilograms a BMI of 64, as pounds
/// one of 29.
/// Weeks of kilograms followed by pounds to the end (the larger part) were left as written
/// with no warning either.
#[test]
fn a_file_of_pounds_under_kg_is_never_taken_for_kilograms() {
    let day =
        |i: i64| chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap() + chrono::Duration::days(i);
    // 30 weigh-ins of 75 kg falling 0.03 kg a day, written in pounds under `kg`.
    let lb = |i: i64| (75.0 - 0.03 * i as f64) / 0.453_592_37;
    let mut all_lb = String::from("date,weight,unit\n");
    for i in 0..30 {
        all_lb.push_str(&format!("{},{:.1},kg\n", day(2 * i), lb(2 * i)));
    }
    let small = Window {
        height_cm: Some(160.0),
        ..window()
    };
    let (w, diags) = read(&all_lb, &small);
    assert!(w.is_none(), "the file is not used");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    let e = &diags[0];
    assert_eq!(
        (e.severity, e.line, e.column),
        (Severity::Error, Some(2), Some(2))
    );
    assert_eq!(
        e.message,
        "the weigh-ins read as kilograms (median 163.4 kg, 30 of 30) give a BMI of 63.8 at the profile's height of 160 cm; as pounds (74.1 kg) they would give 29.0: they look like pounds under `kg`, and the file is not used"
    );
    assert_eq!(e.found.as_deref(), Some("`165.3` with unit `kg`"));
    // The same weigh-ins under `lb` are read, and so are they as kilograms when the profile
    // says such a BMI was checked.
    let (w, diags) = read(&all_lb.replace(",kg", ",lb"), &small);
    assert!(diags.is_empty(), "{diags:#?}");
    assert!((w.unwrap()[0].weight.kg() - 165.3 * 0.453_592_37).abs() < 1e-9);
    let checked = Window {
        high_bmi_checked: true,
        low_bmi_checked: false,
        ..small
    };
    let (w, diags) = read(&all_lb, &checked);
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.unwrap()[0].weight.kg(), 165.3);
    // 74 kg in kilograms: nothing to say.
    let mut kg = String::from("date,weight,unit\n");
    for i in 0..30 {
        kg.push_str(&format!(
            "{},{:.1},kg\n",
            day(2 * i),
            75.0 - 0.06 * i as f64
        ));
    }
    let (w, diags) = read(&kg, &small);
    assert!(diags.is_empty() && w.unwrap().len() == 30, "{diags:#?}");

    // Two weeks in kilograms, then pounds under `kg` to the end: at 160 cm only the converted
    // reading is a likely weight (as written, a BMI of 63.6): converted, a warning per row.
    let mut switched = String::from("date,weight,unit\n");
    for i in 0..30 {
        let kg = 75.0 - 0.03 * (2 * i) as f64;
        let v = if i < 7 { kg } else { kg / 0.453_592_37 };
        switched.push_str(&format!("{},{v:.1},kg\n", day(2 * i)));
    }
    let (w, diags) = read(&switched, &small);
    let w = w.expect("usable");
    assert_eq!(diags.len(), 23, "{diags:#?}");
    assert!(
        diags
            .iter()
            .all(|d| d.message.contains("looks like pounds")),
        "{diags:#?}"
    );
    for (i, x) in w.iter().enumerate() {
        let kg = 75.0 - 0.03 * (2 * i) as f64;
        assert!((x.weight.kg() - kg).abs() < 0.06, "{i}: {}", x.weight.kg());
    }
    // At 180 cm both readings are likely (BMI 50 or 23): the file is not used, at line 9.
    let tall = Window {
        height_cm: Some(180.0),
        ..window()
    };
    let (w, diags) = read(&switched, &tall);
    assert!(w.is_none());
    assert_eq!(
        (diags.len(), diags[0].line, diags[0].severity),
        (1, Some(9), Severity::Error)
    );
    assert!(
        diags[0].message.contains("about 2.18 times the 7 before them (median 74.8 kg): either they are in the other unit (73.9 kg)"),
        "{}",
        diags[0]
    );
    assert!(
        diags[0].message.ends_with(
            "both readings are likely weights at a height of 180 cm; the file is not used"
        ),
        "{}",
        diags[0]
    );
}

/// The mirror: a whole file of kilograms under `lb` read as 0.45 times the weight. 101.6 kg at
/// 178 cm (BMI 32) was read as 46.1 kg (BMI 14.6) without a word, and a report would have shown
/// an underweight person and every figure wrong. The same file at a height where the pounds are
/// a likely weight, the same low reading with the profile's `low-bmi-checked`, and honest
/// pounds are read.
#[test]
fn a_file_of_kilograms_under_lb_is_never_taken_for_pounds() {
    let day =
        |i: i64| chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap() + chrono::Duration::days(i);
    let file = |unit: &str, f: f64| {
        let mut t = String::from("date,weight,unit\n");
        for i in 0..30 {
            t.push_str(&format!(
                "{},{:.1},{unit}\n",
                day(2 * i),
                (101.6 - 0.05 * (2 * i) as f64) * f
            ));
        }
        t
    };
    let at = |cm: f64, checked: bool| Window {
        height_cm: Some(cm),
        low_bmi_checked: checked,
        ..window()
    };
    let (w, diags) = read(&file("lb", 1.0), &at(177.8, false));
    assert!(w.is_none(), "the file is not used");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    let e = &diags[0];
    assert_eq!(
        (e.severity, e.line, e.column),
        (Severity::Error, Some(2), Some(2))
    );
    assert_eq!(
        e.message,
        "the weigh-ins read as pounds (median 100.1 lb = 45.4 kg, 30 of 30) give a BMI of 14.4 at the profile's height of 178 cm, underweight; as kilograms they would give 31.7: they look like kilograms under `lb`, and the file is not used"
    );
    assert_eq!(e.found.as_deref(), Some("`101.6` with unit `lb`"));
    // A heavier person's kilograms read as pounds give BMI 17 (133.9 kg at 188 cm): refused too.
    let heavy = file("lb", 133.9 / 101.6);
    assert!(read(&heavy, &at(188.0, false)).0.is_none());
    // Checked by the program team: read as written.
    let (w, diags) = read(&file("lb", 1.0), &at(177.8, true));
    assert!(diags.is_empty(), "{diags:#?}");
    assert!((w.unwrap()[0].weight.kg() - 101.6 * 0.453_592_37).abs() < 1e-9);
    // At 140 cm the pounds are a likely weight (BMI 23.2): read as written.
    let (w, diags) = read(&file("lb", 1.0), &at(140.0, false));
    assert!(diags.is_empty(), "{diags:#?}");
    assert!(w.is_some());
    // Honest pounds of the same person, and the kilograms under `kg`: nothing to say.
    for text in [file("lb", 1.0 / 0.453_592_37), file("kg", 1.0)] {
        let (w, diags) = read(&text, &at(177.8, false));
        assert!(diags.is_empty() && w.unwrap().len() == 30, "{diags:#?}");
    }
}

#[test]
fn kilograms_in_an_lb_row_are_converted_with_a_warning() {
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-01,160,lb\n2026-04-03,159,lb\n2026-04-05,72.3,lb\n2026-04-08,158.5,lb\n",
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(4));
    assert!(
        diags[0].message.contains("looks like kilograms"),
        "{}",
        diags[0]
    );
    assert_eq!(w[2].weight.kg(), 72.3);
}

#[test]
fn a_real_change_is_not_taken_for_a_unit_error() {
    // A 10 % drop is far outside the ±6 % band around the lb/kg factor.
    let (_, diags) = weights("date,weight,unit\n2026-04-01,100,kg\n2026-04-10,90,kg\n");
    assert!(diags.is_empty());
    // Neighbours more than 14 days away do not count.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,72,kg\n2026-05-01,158,kg\n");
    assert!(diags.is_empty());
    assert_eq!(w[1].weight.kg(), 158.0);
}

#[test]
fn identical_rows_with_a_time_are_duplicates_without_one_they_count() {
    // Identical in every column, time included: a duplicate.
    let (w, diags) = weights(
        "date,weight,unit,time\n2026-04-01,72,kg,07:10\n2026-04-01,72,kg,07:10\n2026-04-01,72,kg,19:00\n",
    );
    assert_eq!(w.len(), 2);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(3));
    assert!(
        diags[0].message.contains("identical to line 2"),
        "{}",
        diags[0]
    );
    // Named like any dropped row: column, expected and found (it had its line only).
    assert_eq!(diags[0].column, Some(1));
    assert_eq!(
        diags[0].expected.as_deref(),
        Some("each measurement once: a row that differs from line 2 in some column")
    );
    assert_eq!(
        diags[0].found.as_deref(),
        Some("`2026-04-01,72,kg,07:10`, as on line 2")
    );
    // The same with the time in the date: a duplicate too.
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-01T07:10:00+02:00,72,kg\n2026-04-01T07:10:00+02:00,72,kg\n",
    );
    assert_eq!((w.len(), diags.len()), (1, 1), "{diags:#?}");
    // Without a time there is no strong evidence: both weigh-ins are kept.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,72,kg\n2026-04-01,72,kg\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 2);
}

#[test]
fn a_repeated_block_is_dropped_with_one_warning() {
    // Rows 2–5 pasted again as rows 6–9 (a file exported twice): one warning for the block.
    let block = "2026-04-01,600\n2026-04-01,350\n2026-04-02,700\n2026-04-03,650\n";
    let (v, diags) = intake(&format!("date,kcal\n{block}{block}2026-04-04,500\n"));
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(6));
    assert!(
        diags[0]
            .message
            .contains("lines 6–9 (4 rows) repeat lines 2–5"),
        "{}",
        diags[0]
    );
    assert_eq!(diags[0].column, Some(1));
    assert_eq!(
        diags[0].found.as_deref(),
        Some("`2026-04-01,600` and the 3 rows below it, as on lines 2–5")
    );
    let kcal: Vec<f64> = v.iter().map(|d| d.kcal).collect();
    assert_eq!(kcal, vec![950.0, 700.0, 650.0, 500.0]);
    // Two identical rows are not a block: a meal eaten twice counts twice.
    let (v, diags) =
        intake("date,kcal\n2026-04-01,600\n2026-04-01,350\n2026-04-01,600\n2026-04-01,350\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].kcal, 1900.0);
}

#[test]
fn a_run_of_one_identical_row_is_no_repeated_block() {
    // Six coffees of 40 kcal on one day, no time: every row counts (the last three were
    // dropped as a block repeating the first three, while five such rows all counted).
    let coffees = "2026-04-01,40\n".repeat(6);
    let (v, diags) = intake(&format!(
        "date,kcal\n2026-04-01,300\n{coffees}2026-04-01,900\n2026-04-02,500\n"
    ));
    assert!(
        !diags.iter().any(|d| d.message.contains("row for row")),
        "{diags:#?}"
    );
    assert_eq!(v[0].kcal, 300.0 + 6.0 * 40.0 + 900.0);
    // Two such runs pasted together with other rows are still a repeated block.
    let block = format!("2026-04-01,300\n{}", "2026-04-01,40\n".repeat(3));
    let (v, diags) = intake(&format!("date,kcal\n{block}{block}"));
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert!(
        diags[0]
            .message
            .contains("lines 6–9 (4 rows) repeat lines 2–5"),
        "{}",
        diags[0]
    );
    assert_eq!(v[0].kcal, 420.0);
    // With a time of day, identical rows are duplicates as before.
    let (w, diags) = weights(&format!(
        "date,weight,unit,time\n{}",
        "2026-04-01,72,kg,07:10\n".repeat(6)
    ));
    assert_eq!(w.len(), 1, "{diags:#?}");
}

#[test]
fn an_energy_unit_column_beside_the_energy_is_read() {
    // `Date;Energy;Unit`: the kJ row was read as 7,900 kcal (the `Unit` column is not ours).
    let (v, diags) = intake(
        "Date;Energy;Unit\n01.04.2026;1800;kcal\n02.04.2026;1900;kcal\n03.04.2026;7950;kJ\n04.04.2026;2000;kcal\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let kcal: Vec<f64> = v.iter().map(|d| (d.kcal * 10.0).round() / 10.0).collect();
    // 7950 kJ / 4.184 kJ per kcal = 1900.1 kcal
    assert_eq!(kcal, [1800.0, 1900.0, 1900.1, 2000.0]);
    // A file of kJ rows only is read too, not refused as kilojoules under a kcal header.
    let (v, diags) = intake("date,energy,unit\n2026-04-01,7950,kJ\n2026-04-02,8368,kJ\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[1].kcal, 2000.0);
    // A serving's unit in a food diary's `Unit` column is no energy unit: kcal as written.
    let (v, diags) = intake(
        "date,food,amount,unit,calories\n2026-04-01,Rice,150,g,195\n2026-04-01,Milk,1,cup,120\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].kcal, 315.0);
    // Against the header's unit, the row cannot say which is right: dropped, named.
    let (v, diags) =
        intake("date,kcal,unit\n2026-04-01,1800,kcal\n2026-04-02,7950,kJ\n2026-04-03,1900,kcal\n");
    assert_eq!(v.len(), 3, "{diags:#?}");
    assert!((v[1].kcal - 1900.1).abs() < 0.1, "{v:?}");
    let (v, diags) = intake(
        "date,Energy (kcal),unit\n2026-04-01,1800,kcal\n2026-04-02,7950,kJ\n2026-04-03,1900,kcal\n",
    );
    assert_eq!(v.len(), 2, "{diags:#?}");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(3));
}

#[test]
fn a_duration_unit_column_is_read_and_its_min_is_no_summary_label() {
    // `Duration,Unit`: the `min` rows were left out as summary rows (`Min`), and `1,h` read
    // as 1 minute.
    let (v, diags) = activity(
        "Date,Activity,Duration,Unit\n2026-04-01,walk,30,min\n2026-04-02,walk,1,h\n2026-04-03,cycling,45,min\n2026-04-04,walk,1.5,hours\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = v.iter().map(|a| a.minutes).collect();
    assert_eq!(minutes, [30.0, 60.0, 45.0, 90.0]);
    // A unit the reader does not know in that column (`Std.`) drops its row, named; it was
    // read as 2 minutes.
    let (v, diags) =
        activity("Date,Activity,Duration,Unit\n2026-04-01,walk,30,min\n2026-04-02,walk,2,Std.\n");
    assert_eq!(v.len(), 1, "{diags:#?}");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(3)));
    assert!(
        diags[0].message.contains("unknown duration unit"),
        "{}",
        diags[0]
    );
    // A unit column of distances only (`km`) leaves the minutes as they were.
    let (v, diags) = activity(
        "Date,Activity,Duration,Distance,Unit\n2026-04-01,walk,30,2.1,km\n2026-04-02,swim,40,800,m\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = v.iter().map(|a| a.minutes).collect();
    assert_eq!(minutes, [30.0, 40.0]);
    // Under a header that names the duration's unit, a unit column is another value's (a
    // distance in metres): the hours are read as the header says.
    let (v, diags) = activity(
        "Date,Activity,Duration (h),Distance,Unit\n2026-04-01,walk,0.5,2.1,km\n2026-04-03,run,0.5,5000,m\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = v.iter().map(|a| a.minutes).collect();
    assert_eq!(minutes, [30.0, 30.0]);
    // An effort column's `Max` is an effort, not a row's maximum: both workouts count.
    let (v, diags) = activity(
        "Date,Activity,Duration,Intensity\n2026-04-01,walk,30,Low\n2026-04-02,HIIT,20,Max\n2026-04-03,cycling,45,Moderate\n2026-04-04,run,25,Max\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v.len(), 4);
    // A `Min` row marked in a notes column is still a summary row.
    let (v, _) = activity(
        "Date,Activity,Duration,Notes\n2026-04-01,walk,30,\n2026-04-02,walk,20,Min\n2026-04-03,walk,40,\n",
    );
    assert_eq!(v.len(), 2);
}

#[test]
fn a_long_repeated_block_on_one_day_is_found() {
    // More rows on one day than the pairwise comparison of same-day rows handles.
    let mut block = String::new();
    for i in 0..20 {
        block.push_str(&format!("2026-04-01,{}\n", 100 + i));
    }
    let (v, diags) = intake(&format!("date,kcal\n{block}{block}"));
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert!(
        diags[0]
            .message
            .contains("lines 22–41 (20 rows) repeat lines 2–21"),
        "{}",
        diags[0]
    );
    // 100 + 101 + … + 119 = 2190 kcal
    assert_eq!(v[0].kcal, 2190.0);
}

#[test]
fn unit_check_uses_neighbours_by_date_not_by_file_order() {
    // Rows out of date order; the 158 on 5 April has three neighbours within 14 days, and the
    // row dated 30 May (last in the file but far away) is not one of them.
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-07,71.5,kg\n2026-04-01,72.0,kg\n2026-04-05,158.0,kg\n2026-05-30,158.0,kg\n2026-04-03,71.8,kg\n",
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(4));
    assert!(diags[0].message.contains("median 71.8 kg"), "{}", diags[0]);
    assert_eq!(w.len(), 5);
    assert!((w[2].weight.kg() - 71.667_594_46).abs() < 1e-8);
    assert_eq!(w[4].weight.kg(), 158.0);
}

#[test]
fn dates_outside_the_window_are_dropped() {
    let text = "date,weight,unit\n2026-03-31,72,kg\n2026-04-01,72,kg\n2026-09-01,71,kg\n2027-01-01,70,kg\n";
    let read_in = |withdrew: Option<NaiveDate>| {
        let mut diags = Vec::new();
        let w = Window {
            withdrew,
            ..window()
        };
        let out = parse_weights(
            text,
            &CsvOptions::default(),
            &ctx("weights.csv"),
            &w,
            &mut diags,
        )
        .unwrap();
        diags.sort_by_key(|d| d.line);
        (out, diags)
    };
    let (out, diags) = read_in(None);
    assert_eq!(out.len(), 2);
    assert_eq!(diags.len(), 2, "{diags:#?}");
    assert!(
        diags[0].message.contains("before enrolment"),
        "{}",
        diags[0]
    );
    assert!(diags[1].message.contains("in the future"), "{}", diags[1]);
    assert_eq!(diags[1].line, Some(5));
    assert_eq!(diags[1].column, Some(1));
    // After withdrawn consent, the rows after it, the one in the future included, are one
    // warning at the first of them, which says nothing of their dates.
    let (out, diags) = read_in(Some(d(2026, 8, 31)));
    assert_eq!(out.len(), 1);
    assert_eq!(diags.len(), 2, "{diags:#?}");
    assert!(
        diags[0].message.contains("before enrolment"),
        "{}",
        diags[0]
    );
    assert!(
        diags[1]
            .message
            .contains("after consent was withdrawn (2026-08-31)"),
        "{}",
        diags[1]
    );
    assert_eq!((diags[1].line, diags[1].column), (Some(4), Some(1)));
}

/// Every withdrawal was read as withdrawn consent: a weigh-in after `withdrew` was dropped even
/// for someone who had only stopped the program. With `withdrawal_reason: stopped_program`
/// (`follow_up_weigh_ins`) the weights file keeps it as follow-up; the food log, program
/// activity, still drops its rows after the day; with consent both drop them as before.
#[test]
fn weigh_ins_after_withdrawal_are_read_only_for_someone_who_stopped_the_program() {
    let weights = "date,weight,unit\n2026-08-30,80,kg\n2026-08-31,79.8,kg\n2026-09-14,79.1,kg\n";
    let food = "date,kcal\n2026-08-31,1900\n2026-09-14,2100\n";
    for stopped in [false, true] {
        let w = Window {
            withdrew: Some(d(2026, 8, 31)),
            follow_up_weigh_ins: stopped,
            ..window()
        };
        let (out, diags) = read(weights, &w);
        let out = out.unwrap();
        let dates: Vec<_> = out.iter().map(|x| x.date).collect();
        if stopped {
            assert_eq!(dates, [d(2026, 8, 30), d(2026, 8, 31), d(2026, 9, 14)]);
            assert_eq!(out[2].weight.kg(), 79.1);
            assert!(diags.is_empty(), "{diags:#?}");
        } else {
            assert_eq!(dates, [d(2026, 8, 30), d(2026, 8, 31)]);
            assert_eq!(diags.len(), 1, "{diags:#?}");
            assert_eq!(
                diags[0].message,
                "rows dated after consent was withdrawn (2026-08-31) are not read: stop what adds them, remove them"
            );
            assert_eq!(diags[0].line, Some(4));
        }
        let mut diags = Vec::new();
        let kcal = parse_intake(
            food,
            &CsvOptions::default(),
            &ctx("intake.csv"),
            &w,
            &mut diags,
        )
        .unwrap();
        assert_eq!(kcal.len(), 1, "stopped {stopped}: {kcal:?}");
        assert_eq!((kcal[0].date, kcal[0].kcal), (d(2026, 8, 31), 1900.0));
        assert_eq!(diags.len(), 1, "{diags:#?}");
        let said = if stopped {
            "after withdrawal (2026-08-31)"
        } else {
            "after consent was withdrawn (2026-08-31)"
        };
        assert!(diags[0].message.contains(said), "{}", diags[0]);
    }
}

/// A scale that kept syncing into the folder of someone who withdrew consent on 2026-06-15
/// ended every later monthly run with exit code 1: "30 rows are dated after withdrawal
/// (2026-06-15; 2026-06-16 to 2026-09-26, the first at this line)" in each file, every month,
/// also in the participant's own report, and `weights_rows_in_file` counted those rows. Now
/// only `check` and a run whose period does not begin after the withdrawal warn, with
/// neither the number nor the dates of the rows, saying what to do; the rows are counted
/// nowhere, and a row after it whose value does not read, or that repeats another, is not read
/// or warned about either. Someone who stopped the program keeps their warning's figures (their
/// data may be used), under the same once-only rule.
#[test]
fn rows_after_withdrawn_consent_are_warned_about_once_and_never_shown() {
    // After the withdrawal: a weigh-in, one whose weight does not read, and a row repeated.
    let text = "date,weight,unit\n2026-08-30,80,kg\n2026-09-14,79.1,kg\n2026-08-31,79.8,kg\n2026-10-02,78.4,kg\n2026-10-03,7x8.1,kg\n2026-10-02,78.4,kg\n";
    let withdrawn = Window {
        withdrew: Some(d(2026, 8, 31)),
        ..window()
    };
    for (reported_from, warned) in [
        (None, true),
        (Some(d(2026, 8, 1)), true),
        (Some(d(2026, 8, 31)), true),
        (Some(d(2026, 9, 1)), false),
        (Some(d(2026, 10, 1)), false),
    ] {
        let w = Window {
            reported_from,
            ..withdrawn
        };
        let c = ctx("weights.csv");
        let mut diags = Vec::new();
        let out = parse_weights(text, &CsvOptions::default(), &c, &w, &mut diags).unwrap();
        let dates: Vec<_> = out.iter().map(|x| x.date).collect();
        assert_eq!(dates, [d(2026, 8, 30), d(2026, 8, 31)], "{reported_from:?}");
        assert_eq!(
            c.rows_in_file(),
            2,
            "{reported_from:?}: rows after it are not counted"
        );
        if !warned {
            assert!(diags.is_empty(), "{reported_from:?}: {diags:#?}");
            continue;
        }
        assert_eq!(diags.len(), 1, "{reported_from:?}: {diags:#?}");
        let e = &diags[0];
        assert_eq!(
            (e.severity, e.line, e.column, e.field.as_deref()),
            (Severity::Warning, Some(3), Some(1), Some("date"))
        );
        assert_eq!(
            e.message,
            "rows dated after consent was withdrawn (2026-08-31) are not read: stop what adds them, remove them"
        );
        assert_eq!(e.found.as_deref(), Some("rows dated after 2026-08-31"));
        assert_eq!(
            e.expected.as_deref(),
            Some(
                "no rows dated after 2026-08-31: the participant withdrew consent to the use of their data"
            )
        );
        assert!(
            e.hint
                .as_deref()
                .unwrap()
                .contains("a scale or app that syncs into it")
        );
        // Nothing of the rows: not their dates, not their number, not their values.
        let all = e.to_string();
        for hidden in ["2026-09-14", "2026-10-02", "4 rows", "7x8.1"] {
            assert!(!all.contains(hidden), "{hidden} in {all}");
        }
        assert!(is_after_withdrawn_consent(e));
    }
    // Someone who stopped the program: the food log after they left, with its figures, once.
    let food = "date,kcal\n2026-08-31,1900\n2026-09-14,2100\n2026-09-15,2000\n";
    for (reported_from, warned) in [(Some(d(2026, 8, 1)), true), (Some(d(2026, 9, 1)), false)] {
        let w = Window {
            follow_up_weigh_ins: true,
            reported_from,
            ..withdrawn
        };
        let c = ctx("intake.csv");
        let mut diags = Vec::new();
        let kcal = parse_intake(food, &CsvOptions::default(), &c, &w, &mut diags).unwrap();
        assert_eq!(kcal.len(), 1);
        assert_eq!(c.rows_in_file(), 1);
        if warned {
            assert_eq!(diags.len(), 1, "{diags:#?}");
            assert_eq!(
                diags[0].message,
                "2 rows are dated after withdrawal (2026-08-31; 2026-09-14 to 2026-09-15, the first at this line); they are not counted"
            );
            assert!(!is_after_withdrawn_consent(&diags[0]));
        } else {
            assert!(diags.is_empty(), "{diags:#?}");
        }
    }
}

/// A re-issue of an earlier month (an early as-of) leaves every later row out: one warning per
/// file says how many and from when to when, at the first of them; it was one per row (69 notes
/// in one participant's re-issued report).
#[test]
fn many_rows_after_the_as_of_date_are_one_warning() {
    let mut diags = Vec::new();
    let w = Window {
        enrolled: Some(d(2026, 4, 1)),
        withdrew: None,
        follow_up_weigh_ins: false,
        as_of: d(2026, 7, 1),
        reported_from: None,
        height_cm: None,
        high_bmi_checked: false,
        low_bmi_checked: false,
    };
    let mut text = String::from("date,weight,unit\n");
    for day in 20..=30 {
        text.push_str(&format!("2026-06-{day},72,kg\n"));
    }
    for day in 2..=31 {
        text.push_str(&format!("2026-07-{day:02},71,kg\n"));
    }
    let out = parse_weights(
        &text,
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &w,
        &mut diags,
    )
    .unwrap();
    assert_eq!(out.len(), 11);
    assert_eq!(diags.len(), 1, "{diags:?}");
    assert_eq!(
        diags[0].message,
        "30 rows are dated after the as-of date 2026-07-01 (2026-07-02 to 2026-07-31, the first \
         at this line); they are not counted"
    );
    assert_eq!((diags[0].line, diags[0].column), (Some(13), Some(1)));
    assert_eq!(diags[0].found.as_deref(), Some("2026-07-02 to 2026-07-31"));
}

#[test]
fn bad_units_dates_and_times() {
    let (w, diags) = weights(
        "date,weight,unit,time\n2026-04-01,72,ounce,\n2026-13-01,72,kg,\n2026-04-02,72,kg,7h30\n,72,kg,\n",
    );
    assert_eq!(w.len(), 1);
    assert_eq!(w[0].time, None);
    assert_eq!(diags.len(), 4, "{diags:#?}");
    assert!(diags[0].message.contains("unknown weight unit"));
    assert!(diags[1].message.contains("unreadable date"));
    assert!(diags[2].message.contains("unreadable time"));
    assert!(diags[3].message.contains("`date` is empty"));
}

/// The sample program's planted row without its unit (`SG-032/weights.csv` line 34,
/// `2026-05-14,08:01,91.2,home-scale` under `date,time,weight,unit,source`) read only "unknown
/// weight unit … found: `home-scale`", while `check` noted the row as "read with the missing
/// values empty". The warning now says the row is a field short and what that does. A row of
/// the header's width keeps the plain message.
#[test]
fn a_value_that_fails_on_a_short_row_says_the_row_is_short() {
    let (w, diags) = weights(
        "date,time,weight,unit,source\n2026-05-13,08:03,91.5,kg,home-scale\n2026-05-14,08:01,91.2,home-scale\n2026-05-15,08:02,91.0,xx,home-scale\n",
    );
    assert_eq!(w.len(), 1, "{diags:#?}");
    let unit: Vec<_> = diags
        .iter()
        .filter(|d| d.message.starts_with("unknown weight unit"))
        .collect();
    assert_eq!(unit.len(), 2, "{diags:#?}");
    assert_eq!(unit[0].line, Some(3));
    assert_eq!(
        unit[0].hint.as_deref(),
        Some(
            "this row has 4 fields where the header has 5: a value left out before `unit`, with its delimiter, moves every value after it one column to the left; keep the delimiter of an empty value"
        )
    );
    assert_eq!(unit[1].line, Some(4));
    assert_eq!(unit[1].hint, None);
}

/// British scales export decimal stones; a `st` unit dropped every row of such a file.
#[test]
fn stones_are_read_as_fourteen_pounds() {
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-01,14.5,st\n2026-04-02,14.4,stone\n2026-04-03,92.0,kg\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 3);
    // 14.5 st = 203 lb = 92.079… kg (1 lb = 0.45359237 kg exactly).
    assert!(
        (w[0].weight.kg() - 203.0 * 0.453_592_37).abs() < 1e-9,
        "{}",
        w[0].weight.kg()
    );
    assert!((w[1].weight.kg() - 14.4 * 14.0 * 0.453_592_37).abs() < 1e-9);
}

fn weights_or_error(text: &str) -> (Option<Vec<WeighIn>>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let w = parse_weights(
        text,
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    (w, diags)
}

/// Scales and apps write the unit in the weight cell, with no unit column; every such file
/// was refused for a missing `unit` column.
#[test]
fn units_written_in_the_weight_cells_are_read() {
    let (w, diags) = weights(
        "Date,Weight\n2026-04-01,72.5 kg\n2026-04-02,160.4 lb\n2026-04-03,160 lbs\n2026-04-04,11.5 st\n2026-04-05,72.4kg\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let kg: Vec<f64> = w.iter().map(|x| x.weight.kg()).collect();
    // 1 lb = 0.45359237 kg exactly (international yard and pound agreement, 1959);
    // 1 st = 14 lb.
    let want = [
        72.5,
        160.4 * 0.453_592_37,
        160.0 * 0.453_592_37,
        11.5 * 14.0 * 0.453_592_37,
        72.4,
    ];
    assert_eq!(kg.len(), want.len());
    for (a, b) in kg.iter().zip(want) {
        assert!((a - b).abs() < 1e-9, "{kg:?}");
    }
    // A unit in the cell that agrees with the unit column or the header is fine.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,72.5 kg,kg\n");
    assert!(diags.is_empty() && w.len() == 1, "{diags:#?}");
    let (w, diags) = weights("Date,Weight (lb)\n2026-04-01,160 lbs\n");
    assert!(diags.is_empty() && w.len() == 1, "{diags:#?}");
    // A bare number among them has no unit: that row alone is dropped, named.
    let (w, diags) = weights("Date,Weight\n2026-04-01,72.5 kg\n2026-04-02,72.3\n");
    assert_eq!(w.len(), 1);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(2)));
    assert!(diags[0].message.contains("no unit"), "{}", diags[0]);
    // Without a unit anywhere the file misses its unit column, as before.
    let (w, diags) = weights_or_error("Date,Weight\n2026-04-01,72.5\n");
    assert!(w.is_none());
    assert!(
        diags[0].message.contains("missing required column `unit`"),
        "{}",
        diags[0]
    );
    // Its hint names the ways the README allows, with the file's own header: a header unit, a
    // unit in the cells, a unit column, or the unit named once in program.yaml's mapping.
    assert_eq!(
        diags[0].hint.as_deref(),
        Some(
            "name the unit in the `Weight` column's header (`Weight (kg)` or `Weight (lb)`), \
             write it in each cell (`72.5 kg`), add a `unit` column, or name it once for every \
             such file in program.yaml: `input: { columns: { weights: { \"Weight\": weight (kg) } } }`; \
             a number alone could be kg or lb"
        ),
        "{}",
        diags[0]
    );
    // The header the hint suggests is read.
    let (w, diags) = weights_or_error("Date,Weight (kg)\n2026-04-01,72.5\n");
    assert_eq!(w.map(|w| w.len()), Some(1), "{diags:#?}");
    // Another missing column keeps the general hint.
    let (_, diags) = weights_or_error("Weight,unit\n72.5,kg\n");
    assert!(
        diags[0]
            .hint
            .as_deref()
            .is_some_and(|h| h.contains("name the columns")),
        "{}",
        diags[0]
    );
}

/// A unit in the cell that the unit column or header contradicts: which one is right cannot be
/// known. One such row among others is a slip: that row is dropped with a warning at its cell
/// (it had cost the person the whole file). When at least half of the rows that declare a unit
/// disagree, the declared unit is wrong throughout: the file is refused at the first such cell.
#[test]
fn a_unit_in_the_cell_that_disagrees_with_its_row_drops_the_row_or_refuses_the_file() {
    let (w, diags) = weights_or_error(
        "date,weight,unit\n2026-04-01,72.5,kg\n2026-04-02,160.4 lb,kg\n2026-04-03,72.3,kg\n",
    );
    let kept: Vec<f64> = w.unwrap().iter().map(|x| x.weight.kg()).collect();
    assert_eq!(kept, [72.5, 72.3]);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    let e = &diags[0];
    assert_eq!(e.severity, Severity::Warning);
    assert_eq!(e.file, "participants/P1/weights.csv");
    assert_eq!((e.line, e.column), (Some(3), Some(2)));
    assert!(
        e.message.contains(
            "`160.4 lb` is written in lb but the `unit` column says `kg`; the row is dropped"
        ),
        "{e}"
    );
    assert_eq!(e.found.as_deref(), Some("`160.4 lb`"));
    // Two of three rows disagree: the declared unit is wrong throughout.
    let (w, diags) = weights_or_error(
        "date,weight,unit\n2026-04-01,72.5,kg\n2026-04-02,160.4 lb,kg\n2026-04-03,160.2 lb,kg\n",
    );
    assert!(w.is_none());
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].severity, Severity::Error);
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(2)));
    assert!(
        diags[0]
            .message
            .contains("2 of the 3 rows that declare a unit disagree so"),
        "{}",
        diags[0]
    );
    let (w, diags) = weights_or_error("Date,Weight (kg)\n2026-04-01,14 st 2 lb\n");
    assert!(w.is_none());
    assert!(
        diags[0]
            .message
            .contains("written in st but the header `Weight (kg)` says kg"),
        "{}",
        diags[0]
    );
}

/// Stones and pounds as British scales and people write them: 14 st 2 lb is 198 lb exactly.
#[test]
fn stones_and_pounds_are_read_exactly() {
    let (w, diags) = weights(
        "Date,Weight\n2026-04-01,14 st 2 lb\n2026-04-02,14st 2lb\n2026-04-03,14 st 2\n2026-04-04,14 st 0.5 lb\n2026-04-05,14 st 14 lb\n",
    );
    assert_eq!(w.len(), 4, "{diags:#?}");
    // 198 lb × 0.45359237 kg/lb (exact, 1959 agreement) = 89.81128926 kg.
    for x in &w[..3] {
        assert!(
            (x.weight.kg() - 89.811_289_26).abs() < 1e-9,
            "{}",
            x.weight.kg()
        );
    }
    assert!((w[3].weight.kg() - 196.5 * 0.453_592_37).abs() < 1e-9);
    // 14 pounds is a stone: not a way of writing a weight.
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(6), Some(2)));
    assert!(
        diags[0].message.contains("stones and pounds"),
        "{}",
        diags[0]
    );
    // Under a stones unit column they agree.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,14 st 2 lb,st\n");
    assert!(diags.is_empty() && w.len() == 1, "{diags:#?}");
    // `Weight (st)` was refused as an unknown header unit.
    let (w, diags) = weights("Date,Weight (st)\n2026-04-01,14.5\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert!((w[0].weight.kg() - 203.0 * 0.453_592_37).abs() < 1e-9);
}

/// `14.12 st` was read as 14.12 decimal stones (89.7 kg) without a word, beside `14 st 12 lb`
/// read as 94.3 kg in the same file: people and some apps write stones and pounds as `14.12`.
/// Two decimals 01–13 are read as decimal stones only when the file shows it writes them so;
/// otherwise the rows (or the file, when they are half of it or more) are refused, naming both
/// readings.
#[test]
fn two_decimal_stones_that_could_be_stones_and_pounds_are_not_guessed() {
    // 14 st 12 lb = 208 lb exactly; 208 × 0.45359237 = 94.34721296 kg.
    let (w, diags) = weights("date,weight\n2026-04-01,14 st 12 lb\n2026-04-02,14st 12lb\n");
    assert!(diags.is_empty(), "{diags:#?}");
    for x in &w {
        assert!(
            (x.weight.kg() - 94.347_212_96).abs() < 1e-9,
            "{}",
            x.weight.kg()
        );
    }

    // A file of them, some beside stones and pounds written out: not used.
    let text = "date,weight\n2026-04-01,14.12 st\n2026-04-03,14.10 st\n2026-04-05,14 st 12 lb\n2026-04-07,14st 12lb\n2026-04-09,14.08 st\n";
    let mut diags = Vec::new();
    let w = parse_weights(
        text,
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none(), "the file is not used");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    let e = &diags[0];
    assert_eq!(e.severity, Severity::Error);
    assert_eq!(
        (e.file.as_str(), e.line, e.column),
        ("participants/P1/weights.csv", Some(2), Some(2))
    );
    assert_eq!(
        e.message,
        "the stone weight `14.12` could be 14 st 12 lb (94.3 kg) or 14.12 decimal stones (89.7 kg); 3 of the file's 5 weights are written so and none shows which is meant, so the file is not used"
    );
    assert_eq!(
        e.expected.as_deref(),
        Some("stones and pounds with both units (`14 st 12 lb`), or the weight in kg or lb")
    );
    assert_eq!(e.found.as_deref(), Some("`14.12` in stones"));
    // The same under a `unit` column, and with a decimal comma.
    let mut diags = Vec::new();
    let w = parse_weights(
        "date;weight;unit\n2026-04-01;14,05;st\n2026-04-02;92,1;kg\n",
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none(), "{diags:#?}");
    assert!(diags[0].message.starts_with("the stone weight `14.05` could be 14 st 5 lb (91.2 kg) or 14.05 decimal stones (89.2 kg)"), "{}", diags[0]);

    // One among decimal stones with one decimal: that row is dropped, at its cell.
    let (w, diags) = weights(
        "date,weight,unit\n2026-04-01,14.12,st\n2026-04-02,14.5,st\n2026-04-03,14.4,st\n2026-04-04,14.3,st\n",
    );
    assert_eq!(w.len(), 3);
    assert!((w[0].weight.kg() - 14.5 * 14.0 * 0.453_592_37).abs() < 1e-9);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(
        (diags[0].severity, diags[0].line, diags[0].column),
        (Severity::Warning, Some(2), Some(2))
    );
    assert!(
        diags[0]
            .message
            .ends_with("and the file's other weights do not show which; the row is dropped"),
        "{}",
        diags[0]
    );

    // A file with two decimals stones and pounds cannot write (`.50`) writes decimal stones:
    // `14.12` is then 14.12 st = 197.68 lb, with a note.
    let table_text = "Date,Weight (st)\n2026-04-01,14.12\n2026-04-02,14.50\n2026-04-03,14.00\n";
    let (w, diags) = weights(table_text);
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 3);
    assert!(
        (w[0].weight.kg() - 197.68 * 0.453_592_37).abs() < 1e-9,
        "{}",
        w[0].weight.kg()
    );
    let c = ctx("weights.csv");
    let mut diags = Vec::new();
    parse_weights(
        table_text,
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes.iter().any(|n| n.contains("two-decimal stones as decimal stones (`14.12` = 14.12 st), as `14.50` at line 3 cannot be stones and pounds")),
        "{notes:?}"
    );
    // `14.00` is the same either way: no question.
    let (w, diags) = weights("date,weight,unit\n2026-04-01,14.00,st\n");
    assert!(diags.is_empty() && w.len() == 1, "{diags:#?}");
}

#[test]
fn bom_and_crlf_are_accepted_silently() {
    let (w, diags) =
        weights("\u{feff}date,weight,unit\r\n2026-04-01,72,kg\r\n2026-04-02,71.9,kg\r\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 2);
}

#[test]
fn other_date_formats_follow_the_program() {
    let opts = CsvOptions {
        date_format: "%d/%m/%Y".into(),
        ..Default::default()
    };
    let mut diags = Vec::new();
    let w = parse_weights(
        "date,weight,unit\n02/04/2026,72,kg\n",
        &opts,
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(w[0].date, d(2026, 4, 2));
}

fn intake(text: &str) -> (Vec<IntakeDay>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let v = parse_intake(
        text,
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    (v, diags)
}

#[test]
fn intake_rows_of_a_day_are_summed() {
    let (v, diags) = intake(
        "date,kcal,protein_g,carbs_g\n2026-04-02,400,20,50\n2026-04-01,1800,80,\n2026-04-02,650.5,30,70\n",
    );
    assert!(diags.is_empty());
    assert_eq!(v.len(), 2);
    assert_eq!(v[0].date, d(2026, 4, 1));
    assert_eq!(v[0].carbs_g, None);
    assert_eq!(v[1].kcal, 1050.5);
    assert_eq!(v[1].protein_g, Some(50.0));
    assert_eq!(v[1].carbs_g, Some(120.0));
    assert_eq!(v[1].fat_g, None);
}

#[test]
fn formatted_thousands_in_kcal_and_steps_are_thousands() {
    // A German-locale spreadsheet: semicolons, decimal commas, `.` grouping thousands. The
    // kcal column was read as 1.85 and 2.1 kcal a day (and flagged as intake below 800).
    let (v, diags) = intake(
        "date;kcal;protein_g\n2026-04-01;1.850;72,5\n2026-04-02;2.100,5;80\n2026-04-03;950;60\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let kcal: Vec<f64> = v.iter().map(|i| i.kcal).collect();
    assert_eq!(kcal, [1850.0, 2100.5, 950.0]);
    assert_eq!(v[0].protein_g, Some(72.5));
    // An English-locale export, tab-separated, with `,` grouping thousands; and steps.
    let (v, diags) = intake("date\tkcal\n2026-04-01\t1,850\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].kcal, 1850.0);
    let (a, diags) =
        activity("date;activity;minutes;met;steps\n2026-04-01;walking_3mph;30,5;;12.500\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!((a[0].minutes, a[0].steps), (30.5, Some(12_500.0)));
}

#[test]
fn an_energy_column_without_a_unit_holding_kilojoules_is_refused() {
    let parse = |text: &str| {
        let mut diags = Vec::new();
        let v = parse_intake(
            text,
            &CsvOptions::default(),
            &ctx("intake.csv"),
            &window(),
            &mut diags,
        );
        (v, diags)
    };
    // An app of a kilojoule country: 7,600–9,100 kJ a day were taken as kcal.
    let kj = "date,Energy\n2026-04-01,8000\n2026-04-02,7600\n2026-04-03,9100\n";
    let (v, d) = parse(kj);
    assert!(v.is_none());
    assert_eq!(d.len(), 1, "{d:#?}");
    assert_eq!(d[0].severity, Severity::Error);
    assert_eq!((d[0].line, d[0].column), (Some(1), Some(2)));
    assert!(d[0].message.contains("median 8,000"), "{}", d[0]);
    // A kJ header settles it; kcal-sized totals are read as kcal.
    let (v, d) = parse(&kj.replace("Energy", "Energy (kJ)"));
    assert!(d.is_empty(), "{d:#?}");
    assert_eq!(v.unwrap()[0].kcal, 8000.0 / 4.184);
    // A header that says kcal over kilojoules (a kJ export renamed, a template filled in with
    // kJ) printed "Intake you logged (average) 8,830 kcal/day": a median over 6,000 kcal a day
    // is refused too, whatever the header calls it.
    for header in ["kcal", "Calories", "Energy (kcal)"] {
        let (v, d) = parse(&kj.replace("Energy", header));
        assert!(v.is_none(), "{header}");
        assert_eq!(d.len(), 1, "{d:#?}");
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(2)));
        assert_eq!(
            d[0].message,
            format!(
                "the daily totals of column `{header}` have a median of 8,000 kcal, which nobody \
                 logs for weeks; they look like kilojoules (8,000 kJ is about 1,912 kcal); the \
                 file is not used"
            )
        );
    }
    // A big eater's log under a kcal header is read: 5,500 a day.
    let (v, d) = parse("date,kcal\n2026-04-01,5500\n2026-04-02,5400\n2026-04-03,5600\n");
    assert!(d.is_empty(), "{d:#?}");
    assert_eq!(v.unwrap()[1].kcal, 5400.0);
    let (v, d) = parse("date,Energy\n2026-04-01,1800\n2026-04-02,2100\n2026-04-03,1900\n");
    assert!(d.is_empty(), "{d:#?}");
    assert_eq!(v.unwrap().len(), 3);
    // A phone health app's `Dietary Energy` (read as kcal now) is checked the same way.
    let (v, d) = parse(&kj.replace("Energy", "Dietary Energy"));
    assert!(v.is_none());
    assert!(
        d[0].message.contains("`Dietary Energy` has no unit"),
        "{}",
        d[0]
    );
}

/// Headers of phone health apps, trackers and German-language scales (each file was refused
/// for a missing column).
#[test]
fn headers_of_health_apps_and_german_scales_are_read() {
    let (w, diags) = weights("Date/Time,Weight & Body Mass (kg)\n2026-04-01 07:12:00 +0200,72.5\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(
        (w[0].weight.kg(), w[0].time.as_deref()),
        (72.5, Some("07:12"))
    );
    let (w, diags) = weights("Datum;Gewicht;Einheit\n01.04.2026;72,5;kg\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!((w[0].date, w[0].weight.kg()), (d(2026, 4, 1), 72.5));
    let (v, diags) = intake("Date,Calories In\n2026-04-01,\"1,850\"\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].kcal, 1850.0);
}

#[test]
fn implausible_daily_intake_is_dropped_after_summing() {
    let (v, diags) = intake(
        "date,kcal\n2026-04-01,6000\n2026-04-01,4500\n2026-04-02,0\n2026-04-03,-5\n2026-04-04,1500\n",
    );
    assert_eq!(v.len(), 1);
    assert_eq!(diags.len(), 3, "{diags:#?}");
    only_warnings(&diags);
    assert!(diags[0].message.contains("negative"), "{}", diags[0]);
    assert!(
        diags[1]
            .message
            .contains("10500 kcal on 2026-04-01 (lines 2, 3)"),
        "{}",
        diags[1]
    );
    assert!(
        diags[2].message.contains("0 kcal on 2026-04-02"),
        "{}",
        diags[2]
    );
}

#[test]
fn identical_intake_rows_of_a_day_are_summed_with_a_note() {
    let c = ctx("intake.csv");
    let mut diags = Vec::new();
    let v = parse_intake(
        "date,kcal\n2026-04-01,600\n2026-04-01,600\n2026-04-02,500\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].kcal, 1200.0);
    let notes = c.take_notes();
    assert_eq!(notes.len(), 1);
    assert!(
        notes[0].message.contains("2026-04-01 (lines 2, 3)"),
        "{}",
        notes[0].message
    );
}

fn activity(text: &str) -> (Vec<ActivityEntry>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let v = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    (v, diags)
}

#[test]
fn activity_met_comes_from_the_table_or_the_file() {
    let (v, diags) = activity(
        "date,activity,minutes,met,steps\n2026-04-02,walking_3mph,30,,3100\n2026-04-01,salsa night,45,5.5,\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].activity, "salsa night");
    assert_eq!((v[0].met, v[0].met_source.as_str()), (5.5, "given in file"));
    // Ainsworth et al. 2011, Med Sci Sports Exerc 43:1575: code 17190 = 3.5 MET.
    assert_eq!(
        (v[1].met, v[1].met_source.as_str()),
        (3.5, "Compendium 2011 code 17190")
    );
    assert_eq!(v[1].steps, Some(3100.0));
}

#[test]
fn unknown_activity_is_reported_once_per_label_with_suggestions() {
    let (v, diags) = activity(
        "date,activity,minutes\n2026-04-01,zumba-ish,30\n2026-04-02,zumba-ish,30\n2026-04-03,wlaking,20\n2026-04-04,brisk walk,30\n",
    );
    assert_eq!(v.len(), 1);
    assert_eq!(diags.len(), 2, "{diags:#?}");
    // Sorted by label: `wlaking` then `zumba-ish`.
    assert!(
        diags[1]
            .message
            .contains("unknown activity `zumba-ish` in 2 rows (first at line 2)"),
        "{}",
        diags[1]
    );
    assert_eq!((diags[1].line, diags[1].column), (Some(2), Some(2)));
    let hint = diags[0].hint.as_deref().unwrap();
    assert!(
        hint.contains("nearest known labels: `walking") && hint.contains("add a `met` column"),
        "{hint}"
    );
    assert!(hint.contains("activities:"), "{hint}");
}

#[test]
fn activity_minutes_and_met_bounds() {
    let (v, diags) = activity(
        "date,activity,minutes,met\n2026-04-01,jogging,1000,\n2026-04-02,jogging,-5,\n2026-04-03,odd,30,40\n2026-04-04,cycling_leisure,600,\n2026-04-04,gardening,400,\n2026-04-05,yoga_hatha,60,\n",
    );
    assert_eq!(v.len(), 1);
    assert_eq!(v[0].activity, "yoga_hatha");
    assert_eq!(diags.len(), 4, "{diags:#?}");
    assert!(diags[0].message.contains("implausible minutes"));
    assert!(diags[1].message.contains("implausible minutes"));
    assert!(diags[2].message.contains("MET value out of range"));
    assert!(
        diags[3]
            .message
            .contains("1000 activity minutes on 2026-04-04"),
        "{}",
        diags[3]
    );
}

/// `Datum` (German exports) named the date of weights.csv and intake.csv only: in the other
/// files it was found by its cells, with the note "no column is named as the date", and when
/// the file's other columns were not ours either, `check` listed `date` among the missing
/// columns and its hint asked to map it. It names the date in every file now (docs/GUIDE.md
/// lists it among the headers read).
#[test]
fn datum_names_the_date_in_every_file() {
    let inferred = |d: &[Diagnostic]| {
        d.iter()
            .any(|x| x.message.contains("no column is named as the date"))
    };
    let (v, diags) = activity("Datum,activity,minutes\n2026-04-02,walking_3mph,30\n");
    assert_eq!(v.len(), 1, "{diags:#?}");
    assert!(!inferred(&diags), "{diags:#?}");
    let mut diags = Vec::new();
    let v = parse_sessions(
        "Datum,session,attended\n2026-04-01,1,yes\n",
        &CsvOptions::default(),
        &ctx("sessions.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 1, "{diags:#?}");
    assert!(!inferred(&diags), "{diags:#?}");
    let mut diags = Vec::new();
    let v = parse_labs(
        "Datum,test,value,unit\n2026-04-01,hba1c,5.4,%\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 1, "{diags:#?}");
    assert!(!inferred(&diags), "{diags:#?}");
    // With none of the other columns ours, `date` is no longer among the missing ones.
    let mut diags = Vec::new();
    let v = parse_activity(
        "Datum,Aktivit\u{e4}t,Dauer (min)\n2026-04-02,Laufen,30\n",
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    );
    assert!(v.is_none());
    let missing = diags
        .iter()
        .find(|d| d.message.contains("missing required column"))
        .expect("refused");
    assert!(
        missing
            .message
            .starts_with("missing required columns `activity`, `minutes`;"),
        "{}",
        missing.message
    );
}

#[test]
fn sessions_attendance() {
    let mut diags = Vec::new();
    let v = parse_sessions(
        "date,session,attended\n2026-04-08,2,No\n2026-04-01,1,yes\n2026-04-15,3,maybe\n",
        &CsvOptions::default(),
        &ctx("sessions.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 2);
    assert!(v[0].attended && !v[1].attended);
    assert_eq!(v[0].session, "1");
    assert_eq!(diags.len(), 1);
    assert_eq!(diags[0].column, Some(3));
    // A register's export: every row was dropped as "unreadable attendance".
    let mut diags = Vec::new();
    let v = parse_sessions(
        "date,session,attended\n2026-04-01,1,Present\n2026-04-08,2,Absent\n2026-04-15,3,Attended\n2026-04-22,4,Did not attend\n2026-04-29,5,DNA\n2026-05-06,6,No-show\n2026-05-13,7,✓\n2026-05-20,8,excused\n",
        &CsvOptions::default(),
        &ctx("sessions.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let read: Vec<bool> = v.iter().map(|s| s.attended).collect();
    assert_eq!(read, [true, false, true, false, false, false, true]);
    // `excused` says neither: still a warning at its cell.
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(9), Some(3)));
}

/// A laboratory system's export names each test by its LOINC code: every such row was dropped
/// as an "unknown test", so a diabetes-range HbA1c never reached the clinician's flag.
#[test]
fn lab_tests_named_by_loinc_code_are_read() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,4548-4,6.8,%\n2026-04-01,1558-6,131,mg/dL\n2026-04-01,85354-9,128/82,mmHg\n2026-04-01,59261-8,53,mmol/mol\n2026-04-01,8280-0,92,cm\n2026-04-01,2093-3,5.1,mmol/L\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let tests: Vec<(LabTest, f64)> = v.iter().map(|l| (l.test, l.value)).collect();
    assert_eq!(tests.len(), 6, "{tests:?}");
    assert!(tests.contains(&(LabTest::Hba1c, 6.8)));
    assert!(tests.contains(&(LabTest::SystolicBp, 128.0)));
    assert!(tests.contains(&(LabTest::DiastolicBp, 82.0)));
    assert!(tests.contains(&(LabTest::Waist, 92.0)));
    // 131 mg/dL ÷ 18.016 (ADA Standards of Care, Section 2: 126 mg/dL = 7.0 mmol/L).
    assert!(
        tests
            .iter()
            .any(|(t, x)| *t == LabTest::FastingGlucose && (x - 131.0 / 18.016).abs() < 0.01)
    );
    // A code of another test (total cholesterol) stays unknown, with its warning.
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert!(diags[0].message.contains("unknown test"));
}

/// A value beyond the assay's range, as laboratories export it, is read as the bound it is:
/// `>14.0` HbA1c was dropped as "not a number", and with it the diabetes-range flag.
#[test]
fn censored_lab_values_are_read_as_bounds() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,hba1c,>14.0,%\n2026-04-02,hba1c,> 14.0,%\n2026-04-03,hba1c,>=14,%\n2026-04-04,hba1c,<5.0,%\n2026-04-05,hba1c,≤ 31 mmol/mol,\n2026-04-06,hba1c,6.1,%\n2026-04-07,blood_pressure,>180/110,\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let got: Vec<(f64, Option<Censor>)> = v.iter().map(|l| (l.value, l.censored)).collect();
    assert_eq!(got.len(), 8, "{diags:#?}");
    assert_eq!(got[0], (14.0, Some(Censor::Above)));
    assert_eq!(got[1], (14.0, Some(Censor::Above)));
    assert_eq!(got[2], (14.0, Some(Censor::AtLeast)));
    assert_eq!(got[3], (5.0, Some(Censor::Below)));
    // 31 mmol/mol is 5.0 % (Hoelzel et al. 2004, Clin Chem 50:166): a bound converts as a value.
    assert!((got[4].0 - 4.98).abs() < 0.01, "{got:?}");
    assert_eq!(got[4].1, Some(Censor::AtMost));
    assert_eq!(v[4].unit_as_written, "mmol/mol");
    assert_eq!(got[5], (6.1, None));
    // A bound on a blood pressure pair bounds both numbers, as on a row of its own each: it
    // was dropped with a warning ("a bound … is not read for a blood pressure pair").
    assert!(diags.is_empty(), "{diags:#?}");
    let bp: Vec<(LabTest, f64, Option<Censor>)> = v[6..]
        .iter()
        .map(|l| (l.test, l.value, l.censored))
        .collect();
    assert_eq!(
        bp,
        [
            (LabTest::SystolicBp, 180.0, Some(Censor::Above)),
            (LabTest::DiastolicBp, 110.0, Some(Censor::Above)),
        ]
    );
    assert!(v[6..].iter().all(|l| l.unit_as_written == "mmHg"));
}

/// A bound inside a blood pressure pair (`180/>110`) or a pair with a number left out is
/// dropped with the cell as found and where a bound goes: the bound was read as a unit and the
/// diastolic as an empty number, "not a number in `value`", found ``.
#[test]
fn a_blood_pressure_pair_with_a_bound_inside_says_where_the_bound_goes() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,blood_pressure,180/>110,mmHg\n2026-04-02,blood_pressure,>180/>110,mmHg\n2026-04-03,blood_pressure,180/,mmHg\n2026-04-04,blood_pressure,128/82,mmHg\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 2, "{diags:#?}");
    let said: Vec<(Option<u64>, Option<&str>)> =
        diags.iter().map(|d| (d.line, d.found.as_deref())).collect();
    assert_eq!(
        said,
        [
            (Some(2), Some("`180/>110`")),
            (Some(3), Some("`>180/>110`")),
            (Some(4), Some("`180/`")),
        ]
    );
    assert!(
        diags.iter().all(|d| d
            .expected
            .as_deref()
            .is_some_and(|e| e.contains("a bound before the pair, `>180/110`"))),
        "{diags:#?}"
    );
}

/// A `<` bound below the plausible range (an assay's lower limit: `<2.5 %`, `<0.5 mmol/L`) is
/// a true statement about the value, as a `<` bound within the range is: it was dropped as an
/// implausible value. It is kept as the bound, with a warning that says so; a plain value
/// below the range, or a `>` bound there, is still dropped.
#[test]
fn a_lab_bound_below_the_plausible_range_is_kept_as_a_bound() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,hba1c,<2.5,%\n2026-04-02,fasting_glucose,<= 9 mg/dL,\n2026-04-03,hba1c,2.5,%\n2026-04-04,hba1c,>2.5,%\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let got: Vec<(LabTest, f64, Option<Censor>)> =
        v.iter().map(|l| (l.test, l.value, l.censored)).collect();
    assert_eq!(got.len(), 2, "{got:?} {diags:#?}");
    assert_eq!(got[0], (LabTest::Hba1c, 2.5, Some(Censor::Below)));
    // 9 mg/dL ÷ 18.016 = 0.50 mmol/L (ADA Standards of Care, Section 2: 126 mg/dL = 7.0).
    assert_eq!(got[1].0, LabTest::FastingGlucose);
    assert!((got[1].1 - 9.0 / 18.016).abs() < 1e-9, "{got:?}");
    assert_eq!(got[1].2, Some(Censor::AtMost));
    assert_eq!(v[1].value_as_written, 9.0);
    assert_eq!(diags.len(), 4, "{diags:#?}");
    assert_eq!(
        diags[0].message,
        "`hba1c` bound below the plausible range; kept as the bound it is (< 2.5 %), with no flag"
    );
    assert_eq!(diags[0].line, Some(2));
    assert_eq!(diags[0].found.as_deref(), Some("`<2.5`"));
    assert_eq!(
        diags[1].message,
        "`fasting_glucose` bound below the plausible range; kept as the bound it is (<= 9 mg/dL), with no flag"
    );
    for d in &diags[2..] {
        assert!(
            d.message
                .contains("implausible `hba1c` value; the row is dropped"),
            "{d:#?}"
        );
    }
}

#[test]
fn labs_are_converted_to_canonical_units() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,fasting_glucose,126,mg/dL\n2026-04-01,hba1c,53,mmol/mol\n2026-04-01,waist,40,in\n2026-04-01,systolic_bp,128,mmHg\n2026-04-01,fasting_glucose,5.4,mmol/L\n2026-04-02,waist,90,kg\n2026-04-02,ldl,3,mmol/L\n2026-04-02,hba1c,65,%\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 5);
    // ADA Standards of Care, Section 2: 126 mg/dL = 7.0 mmol/L (÷ 18.016 gives 6.99).
    let g = v
        .iter()
        .find(|l| l.test == LabTest::FastingGlucose && l.unit_as_written == "mg/dL")
        .unwrap();
    assert!((g.value - 6.99).abs() < 0.01);
    assert_eq!(g.value_as_written, 126.0);
    // Hoelzel et al. 2004, Clin Chem 50:166: 53 mmol/mol = 7.0 %.
    let a = v.iter().find(|l| l.test == LabTest::Hba1c).unwrap();
    assert!((a.value - 7.0).abs() < 0.01);
    // 40 in × 2.54 = 101.6 cm (exact factor).
    let w = v.iter().find(|l| l.test == LabTest::Waist).unwrap();
    assert!((w.value - 101.6).abs() < 1e-9);
    assert_eq!(diags.len(), 3, "{diags:#?}");
    assert!(diags[0].message.contains("unit not accepted"));
    assert!(diags[1].message.contains("unknown test"));
    assert!(diags[2].message.contains("implausible `hba1c`"));
}

/// Laboratories that report HbA1c both ways name the standard beside the unit (attack17):
/// `% (NGSP)`, `% DCCT`, `mmol/mol (IFCC)`, `mmol/mol Hb` were each "unit not accepted", so an
/// HbA1c of 6.5 % / 48 mmol/mol was dropped and raised no flag for the clinician. `mg/100 mL`
/// is mg/dL. A unit of another quantity is still refused.
#[test]
fn lab_units_with_their_standard_named_are_read() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,hba1c,6.5,% (NGSP)\n2026-04-02,hba1c,6.5,% DCCT\n2026-04-03,hba1c,6.5,% (DCCT/NGSP)\n2026-04-04,hba1c,48,mmol/mol (IFCC)\n2026-04-05,hba1c,48,mmol/mol Hb\n2026-04-06,fasting_glucose,126,mg/100 mL\n2026-04-07,hba1c,6.5,mg/dL\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 6, "{diags:#?}");
    for l in &v[..3] {
        assert_eq!((l.test, l.value), (LabTest::Hba1c, 6.5));
    }
    // Hoelzel et al. 2004: 48 mmol/mol = 0.09148 × 48 + 2.152 = 6.543 %.
    for l in &v[3..5] {
        assert!((l.value - 6.543).abs() < 1e-3, "{}", l.value);
    }
    // 126 mg/dL ÷ 18.016 = 6.994 mmol/L.
    assert_eq!(v[5].test, LabTest::FastingGlucose);
    assert!((v[5].value - 6.994).abs() < 1e-3, "{}", v[5].value);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert!(diags[0].message.contains("unit not accepted"));
}

/// `%HbA1c`, `% HbA1c`, `NGSP` alone and `IFCC` alone were "unit not accepted", so an HbA1c of
/// 7.2 % or 55 mmol/mol raised no flag for the clinician. They are read (IFCC alone in
/// mmol/mol, NGSP alone in %); a unit still not read is a warning at its cell.
#[test]
fn hba1c_units_that_name_the_test_or_the_standard_alone_are_read() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,hba1c,7.2,%HbA1c\n2026-04-02,hba1c,7.2,% HbA1c\n2026-04-03,hba1c,7.2,NGSP\n2026-04-04,hba1c,55,IFCC\n2026-04-05,hba1c,55,mmol/mol HbA1c\n2026-04-06,hba1c,7.2,HbA1c\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let got: Vec<f64> = v
        .iter()
        .map(|l| (l.value * 1000.0).round() / 1000.0)
        .collect();
    // Hoelzel et al. 2004: 55 mmol/mol = 0.09148 × 55 + 2.152 = 7.183 %.
    assert_eq!(got, [7.2, 7.2, 7.2, 7.183, 7.183]);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(
        (diags[0].line, diags[0].column, diags[0].message.as_str()),
        (
            Some(7),
            Some(4),
            "unit not accepted for `hba1c`; the row is dropped"
        )
    );
}

#[test]
fn missing_required_column_makes_the_file_unusable() {
    let mut diags = Vec::new();
    let out = parse_intake(
        "date,energy_total\n2026-04-01,1800\n",
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    );
    assert!(out.is_none());
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].severity, Severity::Error);
    assert!(diags[0].message.contains("`kcal`"));
    assert!(diags[0].found.as_deref().unwrap().contains("energy_total"));
}

#[test]
fn median_by_selection_matches_the_sorted_definition() {
    assert_eq!(median(&mut [3.0, 1.0, 2.0]), 2.0);
    assert_eq!(median(&mut [4.0, 1.0, 3.0, 2.0]), 2.5);
    assert_eq!(median(&mut [72.0, 71.5, 72.0, 158.0]), 72.0);
    assert_eq!(median(&mut [5.0]), 5.0);
    assert_eq!(median(&mut [70.0, 80.0]), 75.0);
}

#[test]
fn lab_values_out_of_range_or_not_finite_are_named_as_numbers_not_units() {
    // `1e400 %` was read as the number 1 with the unit `e400 %` ("unit not accepted").
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value\n2026-04-01,hba1c,1e400 %\n2026-04-02,hba1c,NaN %\n2026-04-03,hba1c,1e1 %\n2026-04-04,hba1c,5.7 %\n2026-04-05,blood_pressure,128/82 mmHg\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 3, "{v:?}");
    assert_eq!(diags.len(), 3, "{diags:#?}");
    assert_eq!(diags[0].line, Some(2));
    assert_eq!(diags[0].column, Some(3));
    assert!(
        diags[0]
            .message
            .starts_with("out-of-range number (not finite) in `value`"),
        "{}",
        diags[0]
    );
    assert_eq!(diags[0].found.as_deref(), Some("`1e400`"));
    assert!(
        diags[1]
            .message
            .starts_with("not a finite number in `value`"),
        "{}",
        diags[1]
    );
    assert!(
        diags[2].message.starts_with("exponent notation in `value`"),
        "{}",
        diags[2]
    );
    assert!(diags.iter().all(|d| !d.message.contains("unit")));
}

#[test]
fn an_empty_weights_file_is_an_error_naming_the_file() {
    let mut diags = Vec::new();
    let w = parse_weights(
        "",
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none());
    assert_eq!(diags.len(), 1);
    assert_eq!(diags[0].severity, Severity::Error);
    assert_eq!(diags[0].file, "participants/P1/weights.csv");
    assert!(
        diags[0].message.contains("the file is empty"),
        "{}",
        diags[0]
    );
}

#[test]
fn a_weights_file_of_two_people_is_refused_at_the_first_jump() {
    // A scale two people share: his weigh-ins in the morning (95 → 93 kg), hers in the
    // evening (62 kg). Read as one person's, the first day's mean (78.5 kg) was the baseline.
    let mut text = String::from("date,weight,unit,time\n");
    for day in 1..=10 {
        let his = 95.0 - 0.2 * f64::from(day);
        text.push_str(&format!("2026-04-{day:02},{his:.1},kg,07:10\n"));
        text.push_str(&format!("2026-04-{day:02},62.0,kg,21:30\n"));
    }
    let mut diags = Vec::new();
    let w = parse_weights(
        &text,
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none(), "the file must not be used");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    let e = &diags[0];
    assert_eq!(e.severity, Severity::Error);
    // 19 neighbouring pairs (all within a day), every one a jump of more than 10 %.
    assert_eq!(
        e.message,
        "19 of 19 weigh-ins taken within a day of the one before differ from it by more than \
         10 %; body weight does not change that fast, so the file seems to hold more than one \
         person's weigh-ins and is not used"
    );
    assert_eq!((e.line, e.column), (Some(3), Some(2)));
    assert_eq!(
        e.found.as_deref(),
        Some("62.0 kg on 2026-04-01 21:30 (line 3) after 94.8 kg on 2026-04-01 07:10 (line 2)")
    );
}

#[test]
fn one_mistyped_weigh_in_does_not_refuse_the_file() {
    // 59.2 for 95.2: two jumps (in and out) among 19 pairs, left to the trend's outlier screen;
    // and weigh-ins a week apart are never compared.
    let mut text = String::from("date,weight,unit\n");
    for day in 1..=20 {
        let v = if day == 7 { 59.2 } else { 95.2 };
        text.push_str(&format!("2026-04-{day:02},{v},kg\n"));
    }
    text.push_str(
        "2026-05-01,62.0,kg\n2026-05-08,95.0,kg\n2026-05-15,62.0,kg\n2026-05-22,95.0,kg\n",
    );
    let (w, diags) = weights(&text);
    assert_eq!(w.len(), 24);
    assert!(diags.is_empty(), "{diags:#?}");
}

#[test]
fn unknown_activities_past_the_first_twenty_labels_are_counted_in_one_warning() {
    // 25 labels of one row each, then one label of three rows: the labels of most rows are
    // named (the three-row one first among them), the other 6 are counted in one warning.
    let mut text = String::from("date,activity,minutes\n");
    for i in 0..25 {
        text.push_str(&format!("2026-04-01,odd thing {i:02},30\n"));
    }
    for _ in 0..3 {
        text.push_str("2026-04-02,zz most rows,30\n");
    }
    let (v, diags) = activity(&text);
    assert!(v.is_empty());
    assert_eq!(diags.len(), 21, "{diags:#?}");
    let named: Vec<u64> = diags[..20].iter().map(|d| d.line.unwrap()).collect();
    // Labels in label order: odd thing 00 … 18 (lines 2–20), then zz most rows (line 27).
    assert_eq!(named[..19], (2..=20).collect::<Vec<u64>>()[..]);
    assert_eq!(named[19], 27);
    assert!(
        diags[19]
            .message
            .contains("unknown activity `zz most rows` in 3 rows")
    );
    assert_eq!(
        diags[20].message,
        "6 more unknown activities in 6 rows (first at line 21); without a MET value these rows are dropped"
    );
    assert_eq!((diags[20].line, diags[20].column), (Some(21), Some(2)));
}

fn activity_or_error(text: &str) -> (Option<Vec<ActivityEntry>>, Vec<Diagnostic>) {
    let mut diags = Vec::new();
    let a = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    );
    (a, diags)
}

/// A phone's activity export lists each day's step count as a row of its own beside the day's
/// workouts (`2026-04-02,,,,8412,` under `Date,Activity Type,Duration,Distance (km),Steps,…`).
/// Every such row was warned about as "`activity` is empty; the row is dropped": 160 warnings
/// in a six-month export, and every run ended with warnings. Such a row is a step count, no
/// activity (steps alone give no minutes: GUIDE, "Activities"): not read, with one note. A
/// row with steps and a duration but no activity keeps its warning (a workout whose label is
/// missing), and so does a file whose every row gives steps only (nothing in it is read).
#[test]
fn step_count_rows_beside_workouts_are_noted_not_warned_about() {
    let text = "Date,Activity Type,Duration,Distance (km),Steps,Calories Burned\n\
                2026-04-01,Walking,00:32:00,2.88,3520,128\n2026-04-01,,,,8412,\n\
                2026-04-02,,,,5120,\n2026-04-03,,-,,11032,\n2026-04-04,Walking,00:41:00,3.69,4510,164\n\
                2026-04-04,,,,9870,\n";
    let c = ctx("activity.csv");
    let mut diags = Vec::new();
    let a = parse_activity(text, &CsvOptions::default(), &c, &window(), &mut diags);
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [32.0, 41.0]);
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes.iter().any(|n| n.contains(
            "4 rows giving only a step count (first on line 3) not read: steps alone give no activity minutes"
        )),
        "{notes:#?}"
    );
    // A duration without its activity is a workout with its label missing.
    let (_, diags) = activity_or_error(
        "Date,Activity,Duration,Steps\n2026-04-01,Walking,30,3500\n2026-04-02,,45,5200\n",
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(2)));
    // Step counts only, under a workout export's header: nothing to read, as before.
    let (a, diags) =
        activity_or_error("Date,Activity,Duration,Steps\n2026-04-01,,,3500\n2026-04-02,,,5200\n");
    assert!(a.is_none_or(|a| a.is_empty()));
    assert!(
        diags
            .iter()
            .any(|d| d.message.contains("`activity` is empty")),
        "{diags:#?}"
    );
}

/// An export that writes durations as minutes:seconds (`45:00`, `32:30`): `45:00` read as
/// hours:minutes is a 45-hour activity, which cannot be, so the file's one-colon durations are
/// minutes:seconds — all of them, `1:30` too (a minute and a half). Every such row was dropped
/// as "minutes:seconds or hours:minutes". A file whose one-colon durations all fit both
/// readings still has them dropped, one warning each.
#[test]
fn durations_with_one_colon_are_minutes_and_seconds_when_one_cannot_be_hours() {
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration\n2026-04-01,brisk walk,45:00\n2026-04-02,Yoga,32:30\n2026-04-03,brisk walk,1:30\n2026-04-04,jog,0:20:00\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [45.0, 32.5, 1.5, 20.0]);
    // 16:00 as hours:minutes is 960 minutes, the most an activity row may hold: both readings
    // can be, so nothing tells.
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration\n2026-04-01,brisk walk,16:00\n2026-04-02,Yoga,30\n",
    );
    assert_eq!(a.unwrap().len(), 1);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(3)));
    assert!(
        diags[0]
            .message
            .contains("no duration of the file tells which")
    );
}

/// Fitness apps write durations as clock times (`00:45:00`) or with units (`45 min`): every
/// such row was dropped as "not a number".
#[test]
fn durations_written_as_clock_times_or_with_units_are_read() {
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration\n2026-04-01,brisk walk,00:45:00\n2026-04-02,\"Cycling, moderate\",1:10:00\n2026-04-03,brisk walk,45 min\n2026-04-04,jog,1 h 15 min\n2026-04-05,Yoga,1h\n2026-04-06,Yoga,30\n2026-04-07,Yoga,1:30\n",
    );
    let a = a.unwrap();
    let minutes: Vec<f64> = a.iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [45.0, 70.0, 45.0, 75.0, 60.0, 30.0]);
    // `1:30` is a minute and a half or an hour and a half, and nothing in the file tells:
    // dropped, named.
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(8), Some(3)));
    assert!(
        diags[0]
            .message
            .contains("minutes:seconds or hours:minutes"),
        "{}",
        diags[0]
    );
    // A clock duration under `Duration (h)` is still its own; a plain number is hours.
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration (h)\n2026-04-01,Yoga,0:30:00\n2026-04-02,Yoga,1.5\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [30.0, 90.0]);
    // A unit in the cell that the header contradicts refuses the file at that cell.
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration (h)\n2026-04-01,Yoga,1\n2026-04-02,Yoga,45 min\n",
    );
    assert!(a.is_none());
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].severity, Severity::Error);
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(3)));
    assert!(
        diags[0]
            .message
            .contains("`45 min` is written in min but the header `Duration (h)` says h"),
        "{}",
        diags[0]
    );
    // One such slip among more rows costs only its row.
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration (h)\n2026-04-01,Yoga,1\n2026-04-02,Yoga,45 min\n2026-04-03,Yoga,0.5\n",
    );
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [60.0, 30.0]);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].severity, Severity::Warning);
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(3)));
}

/// A food diary prints a `Total` row under each day's meals: summed with them, the day was
/// taken at twice its intake, without a word.
#[test]
fn a_food_diarys_total_rows_are_not_added_to_the_meals() {
    let c = ctx("intake.csv");
    let mut diags = Vec::new();
    let v = parse_intake(
        "Date,Meal,Calories,Protein (g)\n2026-04-01,Breakfast,420,20\n2026-04-01,Lunch,\"1,020\",45\n2026-04-01,TOTAL:,\"1,440\",65\n2026-04-02,Dinner,700,42\n2026-04-02,Total,900,50\n2026-04-03,Total,1800,70\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    // 1 April: the meals (1,440 kcal, as the total says); 2 April: total and meals disagree,
    // dropped; 3 April: a total alone is the day.
    let days: Vec<(NaiveDate, f64, Option<f64>)> =
        v.iter().map(|i| (i.date, i.kcal, i.protein_g)).collect();
    assert_eq!(
        days,
        [
            (d(2026, 4, 1), 1440.0, Some(65.0)),
            (d(2026, 4, 3), 1800.0, Some(70.0))
        ]
    );
    // The day whose total disagrees; the diary's `Meal` column is named in a note, not a
    // warning (it is not one of ours misspelt).
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(6), Some(3)));
    assert!(
        diags[0]
            .message
            .contains("900 kcal are not the sum of the day's other rows (700 kcal)"),
        "{}",
        diags[0]
    );
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(notes.iter().any(|n| n.contains("`Meal`")), "{notes:?}");
    assert!(
        notes
            .iter()
            .any(|n| n.contains("1 row giving a day's total")),
        "{notes:?}"
    );
}

/// A log sheet with its days written in ahead: the days left blank (or holding `-`, `N/A`)
/// are no measurements and no mistakes. Each was warned about ("`weight` is empty"), so a
/// sheet filled in on 10 days of 30 gave 20 warnings and every run ended with warnings. A
/// blank day with a note, or a day with a unit and a note but no weight, is still named.
#[test]
fn days_a_log_sheet_leaves_blank_are_not_read_with_a_note() {
    let c = ctx("weights.csv");
    let mut diags = Vec::new();
    let w = parse_weights(
        "date,weight,unit,source,notes\n2026-04-01,72.5,kg,home-scale,\n2026-04-02,,kg,home-scale,\n\
         2026-04-03,-,,,\n2026-04-04,N/A,kg,,\n2026-04-05,72.1,kg,,\n2026-04-06,,kg,,scale broken\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(
        w.iter().map(|x| x.weight.kg()).collect::<Vec<_>>(),
        [72.5, 72.1]
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(7), Some(2)));
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes.iter().any(|n| n.contains(
            "3 rows with a date and nothing recorded (first on line 3; the days a log sheet leaves blank) not read"
        )),
        "{notes:?}"
    );
    // The same for a food diary and an activity log with their days written in ahead; an
    // activity named with no minutes is still a row to correct.
    let c = ctx("activity.csv");
    let mut diags = Vec::new();
    let a = parse_activity(
        "date,activity,minutes\n2026-04-01,walking,30\n2026-04-02,,\n2026-04-03,yoga,\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(a.len(), 1);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(4));
}

/// Spreadsheet summary rows (`Average`, `Total` where the date would be) are no measurements:
/// left out with a note, not a warning per row.
#[test]
fn summary_rows_are_left_out_with_a_note() {
    let c = ctx("weights.csv");
    let mut diags = Vec::new();
    let w = parse_weights(
        "date,weight,unit\n\n2026-04-01,72.5,kg\n2026-04-02,72.3,kg\n\nAverage,72.4,kg\nMAX:,72.5,kg\nnot a date,72,kg\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(w.len(), 2);
    // Only the row that is neither a date nor a summary is warned about.
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(8));
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes
            .iter()
            .any(|n| n.contains("2 rows summing up the others (`Average` on line 6) left out")),
        "{notes:?}"
    );
}

/// A summary row without a date (`,Total,120` under an activity log) is left out with the
/// note, not warned about as a row with an empty date; a time of day may be 12-hour.
#[test]
fn a_summary_row_without_a_date_is_left_out_and_times_may_be_twelve_hour() {
    let c = ctx("activity.csv");
    let mut diags = Vec::new();
    let a = parse_activity(
        "date,activity,minutes\n2026-04-01,brisk walk,30\n2026-04-02,Yoga,45\n,Total,75\n,brisk walk,20\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(
        a.iter().map(|x| x.minutes).collect::<Vec<_>>(),
        [30.0, 45.0]
    );
    // The dateless row that is no total is still named.
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(5));
    assert!(diags[0].message.contains("`date` is empty"), "{}", diags[0]);
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes
            .iter()
            .any(|n| n.contains("1 row summing up the others (`Total` on line 4)")),
        "{notes:?}"
    );
    let (w, diags) =
        weights("date,time,weight,unit\n2026-04-01,7:12 AM,72.5,kg\n2026-04-01,7:40 PM,73,kg\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(
        w.iter().map(|x| x.time.as_deref()).collect::<Vec<_>>(),
        [Some("07:12"), Some("19:40")]
    );
}

/// Diaries print the unit with the energy and grams with the macros; every such row was
/// dropped as not a number (and the macros ignored).
#[test]
fn energy_and_grams_written_with_their_units_are_read() {
    let (v, diags) = intake(
        "date,kcal,protein_g\n2026-04-01,\"1,850 kcal\",72 g\n2026-04-02,2100 Cal,80\n2026-04-03,8368 kJ,85.5 g\n2026-04-04,n/a,1\n",
    );
    let got: Vec<(f64, Option<f64>)> = v.iter().map(|i| (i.kcal, i.protein_g)).collect();
    // 8368 kJ / 4.184 kJ/kcal (thermochemical calorie) = 2000 kcal.
    assert_eq!(
        got,
        [
            (1850.0, Some(72.0)),
            (2100.0, Some(80.0)),
            (2000.0, Some(85.5))
        ]
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert!(diags[0].message.contains("not a number"), "{}", diags[0]);
    // Its example is an energy, not a weight (it read "e.g. `72.5`" and "`72.5 kg`").
    assert_eq!(
        diags[0].expected.as_deref(),
        Some("a number with a decimal point, e.g. `1850`")
    );
    assert_eq!(
        diags[0].hint.as_deref(),
        Some(
            "write a number such as `1850` (no words; where a unit is allowed, after the number: `1850 kcal`)"
        )
    );
    // A unit in the cell that the header contradicts refuses the file at that cell.
    let mut diags = Vec::new();
    let v = parse_intake(
        "date,Energy (kJ)\n2026-04-01,8000\n2026-04-02,1900 kcal\n",
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    );
    assert!(v.is_none());
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(2)));
    assert!(
        diags[0]
            .message
            .contains("`1900 kcal` is written in kcal but the header `Energy (kJ)` says kJ"),
        "{}",
        diags[0]
    );
    // One such slip among more rows costs only its row, with a warning at its cell.
    let mut diags = Vec::new();
    let v = parse_intake(
        "date,Energy (kJ)\n2026-04-01,8000\n2026-04-02,1900 kcal\n2026-04-03,8368\n",
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    // 8000 kJ and 8368 kJ / 4.184 kJ/kcal.
    let kcal: Vec<f64> = v.iter().map(|i| (i.kcal * 10.0).round() / 10.0).collect();
    assert_eq!(kcal, [1912.0, 2000.0]);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].severity, Severity::Warning);
    assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(2)));
    assert!(
        diags[0]
            .message
            .ends_with("the row is dropped, as it cannot say which unit it is in")
    );
}

/// `check` states what was recognised in the cells, once per file.
#[test]
fn forms_recognised_in_the_cells_are_stated_once_per_file() {
    let notes =
        |text: &str,
         parse: fn(&str, &CsvOptions, &FileCtx, &Window, &mut Vec<Diagnostic>) -> bool| {
            let c = ctx("f.csv");
            let mut diags = Vec::new();
            assert!(
                parse(text, &CsvOptions::default(), &c, &window(), &mut diags),
                "{diags:#?}"
            );
            c.take_notes()
                .into_iter()
                .map(|n| n.message)
                .collect::<Vec<_>>()
                .join(" | ")
        };
    let w = |t: &str, o: &CsvOptions, c: &FileCtx, w: &Window, d: &mut Vec<Diagnostic>| {
        parse_weights(t, o, c, w, d).is_some()
    };
    let a = |t: &str, o: &CsvOptions, c: &FileCtx, w: &Window, d: &mut Vec<Diagnostic>| {
        parse_activity(t, o, c, w, d).is_some()
    };
    let n = notes(
        "Date,Weight\n\"May 1, 2026\",72.5 kg\n\"May 2, 2026\",14 st 2 lb\n01.05.2026 7:10 AM,72 kg\n",
        w,
    );
    assert!(
        n.contains("weights with their unit in the cell (`72.5 kg`)"),
        "{n}"
    );
    assert!(
        n.contains("stones and pounds (`14 st 2 lb` = 198 lb, the file's first)"),
        "{n}"
    );
    assert!(n.contains("dates with the month's name"), "{n}");
    assert!(n.contains("dotted dates read day first"), "{n}");
    let n = notes(
        "date,activity,minutes\n2026-04-01,Yoga,0:45:00\n2026-04-02,Yoga,45 min\n",
        a,
    );
    assert!(n.contains("durations as h:mm:ss"), "{n}");
    assert!(n.contains("durations with their units"), "{n}");
    assert!(!n.contains("month's name"), "{n}");
    // The note quotes the file's own first value and what it was read as, once, never the
    // guide's example: `14 st 2 lb` = 198 lb was quoted for a file of `11 st 2 lb`.
    let n = notes(
        "Date,Weight\n2026-04-01,11 st 2 lb\n2026-04-02,11 st 0.5 lb\n2026-04-03,11st 2.3lb\n",
        w,
    );
    assert_eq!(
        n,
        "stones and pounds (`11 st 2 lb` = 156 lb, the file's first)"
    );
    let n = notes("Date,Weight\n2026-04-01,10 st 2.3 lb\n", w);
    assert_eq!(
        n,
        "stones and pounds (`10 st 2.3 lb` = 142.3 lb, the file's first)"
    );
    let n = notes(
        "date,activity,minutes\n2026-04-01,Yoga,1:05:30\n2026-04-02,Yoga,0:45:00\n",
        a,
    );
    assert_eq!(
        n,
        "durations as h:mm:ss (`1:05:30` = 65.5 minutes, the file's first)"
    );
    // A month-first date with a one-digit month and a two-digit day (`5/13/2026`) has its
    // second slash at the fifth byte, like `2026/05/13`: it is no year-first date.
    let n = notes(
        "Date,Weight (kg)\n5/1/2026 7:32 AM,84.2\n5/13/2026 7:30 PM,84.0\n",
        w,
    );
    assert!(n.contains("numeric dates read month first"), "{n}");
    assert!(!n.contains("year/month/day"), "{n}");
    let n = notes("Date,Weight (kg)\n2026/05/01,84.2\n2026/05/13,84.0\n", w);
    assert!(n.contains("dates written year/month/day"), "{n}");
}

/// A smart scale app's export: a date row (` May 1, 2026`) above that day's measurements,
/// which give only the time of day, and weights with their unit; a delimiter ends each line.
/// The file was refused for missing `date` and `unit` columns.
#[test]
fn dates_in_rows_of_their_own_above_the_measurements_are_read() {
    let (w, diags) = weights(
        "Time,Weight,BMI,\n\" May 2, 2026\",\n\"7:05 AM\",72.3 kg,23.4,\n\" May 1, 2026\",\n\"7:12 AM\",72.5 kg,23.5,\n\"9:40 PM\",72.5 kg,23.5,\n",
    );
    let got: Vec<(NaiveDate, Option<&str>, f64)> = w
        .iter()
        .map(|x| (x.date, x.time.as_deref(), x.weight.kg()))
        .collect();
    // The same weight at another time of another day is no duplicate.
    assert_eq!(
        got,
        [
            (d(2026, 5, 1), Some("07:12"), 72.5),
            (d(2026, 5, 1), Some("21:40"), 72.5),
            (d(2026, 5, 2), Some("07:05"), 72.3)
        ]
    );
    // No warning: the `BMI` column is only named in a note of columns not read (the header's
    // final delimiter names none).
    assert!(diags.is_empty(), "{diags:#?}");
    // A measurement before any date row has no date: dropped, named at the time column.
    let (w, diags) = weights("Time,Weight\n7:00 AM,72 kg\n2026-05-01,\n7:12 AM,72.5 kg\n");
    assert_eq!(w.len(), 1);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(1)));
    assert!(diags[0].message.contains("`date` is empty"), "{}", diags[0]);
    // Without any date row the date column is missing, as before.
    let (w, diags) = weights_or_error("Time,Weight\n7:00 AM,72 kg\n");
    assert!(w.is_none());
    assert!(
        diags[0].message.contains("missing required column `date`"),
        "{}",
        diags[0]
    );
}

/// An activity log's `Total` row with a `met` value was read as one more activity (the day's
/// minutes counted twice).
#[test]
fn an_activity_logs_total_row_is_not_an_activity() {
    let c = ctx("activity.csv");
    let mut diags = Vec::new();
    let a = parse_activity(
        "date,activity,minutes,met\n2026-04-01,brisk walk,30,4.3\n2026-04-01,Yoga,20,2.5\n2026-04-01,TOTAL,50,3.5\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(a.iter().map(|x| x.minutes).sum::<f64>(), 50.0);
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes
            .iter()
            .any(|n| n.contains("1 row summing up the others (`TOTAL` on line 4)")),
        "{notes:?}"
    );
}

/// A summary row with a date, marked in a column we do not read (`Average` in `Notes`, `Max`
/// in `Meal`), was read as one more weigh-in, meal or activity.
#[test]
fn summary_rows_marked_in_another_column_are_not_measurements() {
    let (w, diags) = weights(
        "date,weight,unit,notes\n2026-04-01,72.5,kg,\n2026-04-02,72.1,kg,after run\n2026-04-30,72.3,kg,Average\n",
    );
    assert_eq!(
        w.iter().map(|x| x.weight.kg()).collect::<Vec<_>>(),
        [72.5, 72.1]
    );
    // The `notes` column is named in a note of columns not read, not warned about.
    assert!(diags.is_empty(), "{diags:#?}");
    let (v, _) = intake(
        "Date,Meal,Calories\n2026-04-01,Breakfast,400\n2026-04-01,Lunch,800\n2026-04-01,Average,600\n",
    );
    assert_eq!(v.iter().map(|i| i.kcal).collect::<Vec<_>>(), [1200.0]);
    let (a, _) = activity_or_error(
        "date,activity,minutes,notes\n2026-04-01,brisk walk,30,\n2026-04-01,brisk walk,30,Max\n",
    );
    assert_eq!(
        a.unwrap().iter().map(|x| x.minutes).collect::<Vec<_>>(),
        [30.0]
    );
}

/// "Found" quotes the cell as written. It quoted the number read from it: `20 h` of minutes
/// was "found: `1200`", `99999999999999999` steps "found: `100000000000000000`" (a value in
/// no file), `7.50` MET "`7.5`".
#[test]
fn out_of_range_activity_values_are_quoted_as_written() {
    let (v, diags) = activity(
        "date,activity,minutes,met,steps\n2026-04-01,walking,20 h,,\n2026-04-02,walking,30,,99999999999999999\n2026-04-03,odd,30,40.50,\n",
    );
    assert_eq!(v.len(), 1, "{diags:#?}");
    let found: Vec<&str> = diags.iter().filter_map(|d| d.found.as_deref()).collect();
    assert_eq!(
        found,
        [
            "`20 h` (read as 1200 minutes)",
            "`99999999999999999`",
            "`40.50`",
        ],
        "{diags:#?}"
    );
}

/// A spreadsheet's `4/2/2026` and `4/15/2026`: the note said "dates such as `05/13/2026` read
/// month first", a date the file does not hold. It names the file's own date that tells.
#[test]
fn the_order_of_numeric_dates_is_shown_on_the_files_own_date() {
    let mut diags = Vec::new();
    let c = ctx("weights.csv");
    let w = parse_weights(
        "date,weight,unit\n4/2/2026,72.5,kg\n4/15/2026,72.4,kg\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 2);
    let notes = c.take_notes();
    assert_eq!(notes.len(), 1, "{notes:?}");
    assert_eq!(
        notes[0].message,
        "numeric dates read month first (`4/15/2026` = 2026-04-15), the only order that reads every date of the file"
    );
}

#[test]
fn the_thousands_note_quotes_a_number_the_file_holds() {
    // A fixed `1.850` was quoted to a file that wrote `1,191` (comma-grouped, quoted).
    let c = ctx("intake.csv");
    let mut diags = Vec::new();
    let i = parse_intake(
        "date,kcal\n2026-04-01,\"1,191\"\n2026-04-02,\"1,850\"\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .unwrap();
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(
        i.iter().map(|x| x.kcal).collect::<Vec<_>>(),
        [1191.0, 1850.0]
    );
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes
            .iter()
            .any(|n| n.contains("read as whole thousands (`1,191` = 1191)")),
        "{notes:?}"
    );
}

/// A lab value without a unit is read in the one accepted unit that makes it plausible, with a
/// warning, so a diabetes-range HbA1c or fasting glucose still reaches the clinician's flag; a
/// value plausible in two units is still dropped. Ranges: `lab_range` (common practice);
/// conversions as in `labs_are_converted_to_canonical_units`.
#[test]
fn a_lab_value_without_a_unit_is_read_in_the_one_unit_that_makes_it_plausible() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value\n2026-04-01,hba1c,6.8\n2026-04-02,hba1c,53\n2026-04-03,fasting_glucose,131\n2026-04-04,fasting_glucose,7.4\n2026-04-05,fasting_glucose,25\n2026-04-06,waist,90\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let got: Vec<(LabTest, f64, &str)> = v
        .iter()
        .map(|l| {
            (
                l.test,
                (l.value * 100.0).round() / 100.0,
                l.unit_as_written.as_str(),
            )
        })
        .collect();
    assert_eq!(
        got,
        vec![
            (LabTest::Hba1c, 6.8, "%"),
            // Hoelzel et al. 2004, Clin Chem 50:166: 53 mmol/mol = 7.0 %.
            (LabTest::Hba1c, 7.0, "mmol/mol"),
            // 131 mg/dL ÷ 18.016 = 7.27 mmol/L.
            (LabTest::FastingGlucose, 7.27, "mg/dL"),
            (LabTest::FastingGlucose, 7.4, "mmol/L"),
        ]
    );
    assert_eq!(diags.len(), 6, "{diags:#?}");
    assert!(
        diags[0].message.contains("no unit for `hba1c`; read as %"),
        "{}",
        diags[0]
    );
    assert!(diags[2].message.contains("read as mg/dL"), "{}", diags[2]);
    // 25 mmol/L and 25 mg/dL (1.4 mmol/L) are both possible; 90 cm and 90 in too.
    for d in &diags[4..] {
        assert!(d.message.contains("the row is dropped"), "{d}");
        assert!(d.hint.as_deref().unwrap().contains("plausible in"), "{d}");
    }
    assert_eq!(diags[4].line, Some(6));
}

/// A lab value that is not a number at all is quoted as written: `abc` was read as no number
/// with the unit `abc`, and the message said it found an empty value.
#[test]
fn a_lab_value_that_is_not_a_number_is_quoted_as_written() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value\n2026-04-01,waist,abc\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert!(v.is_empty());
    // The row's warning, and the file's error: no row of it reads.
    assert_eq!(diags.len(), 2, "{diags:#?}");
    assert!(
        diags[1].message.starts_with("no row of the file"),
        "{}",
        diags[1]
    );
    assert!(
        diags[0].message.starts_with("not a number in `value`"),
        "{}",
        diags[0]
    );
    assert_eq!(diags[0].found.as_deref(), Some("`abc`"));
}

/// A scale or health app that exports body weight in grams (`weight_g`, `Weight (g)`, a `unit`
/// column of `g`, `72500 g` in the cells) had the file refused ("missing required columns") or
/// every row dropped ("unknown weight unit"). Where the file states grams it is read, converted
/// (1 kg = 1000 g); a number is never taken for grams because of its size.
#[test]
fn weights_in_grams_are_read_where_the_file_says_grams() {
    for text in [
        "date,weight_g\n2026-04-01,72500\n2026-04-02,72350\n",
        "Date,Weight (g)\n2026-04-01,72500\n2026-04-02,72350\n",
        "date,weight,unit\n2026-04-01,72500,g\n2026-04-02,72350,grams\n",
        "date,weight\n2026-04-01,72500 g\n2026-04-02,72350g\n",
    ] {
        let (w, diags) = weights(text);
        assert!(diags.is_empty(), "{text}: {diags:#?}");
        assert_eq!(w.len(), 2, "{text}");
        assert!((w[0].weight.kg() - 72.5).abs() < 1e-12, "{text}: {w:?}");
        assert!((w[1].weight.kg() - 72.35).abs() < 1e-12, "{text}: {w:?}");
    }
    // Grams only where stated: 72500 under `kg` is no weight (dropped, named), not 72.5 kg.
    let (w, diags) = read(
        "date,weight,unit\n2026-04-01,72500,kg\n2026-04-02,72.4,kg\n",
        &window(),
    );
    let w = w.expect("usable");
    assert_eq!(w.len(), 1);
    assert!((w[0].weight.kg() - 72.4).abs() < 1e-12);
    assert!(
        diags
            .iter()
            .any(|x| x.message.contains("implausible weight") && x.line == Some(2)),
        "{diags:#?}"
    );
    // A cell in grams under a header in kilograms disagrees: the row is dropped, at its cell.
    let (w, diags) = read(
        "date,weight_kg\n2026-04-01,72500 g\n2026-04-02,72.4\n2026-04-03,72.3\n",
        &window(),
    );
    assert_eq!(w.expect("usable").len(), 2, "{diags:#?}");
    assert!(
        diags
            .iter()
            .any(|x| x.line == Some(2) && x.column == Some(2)),
        "{diags:#?}"
    );
}

/// A step counter's export (`date,steps`) cannot be used as activity: steps alone give neither
/// the minutes nor the energy (that needs the time walked and the pace or stride). The file is
/// refused at the `steps` column, and the hint says why and what to provide instead.
#[test]
fn a_steps_only_activity_file_says_why_and_what_to_add() {
    let (v, diags) = activity_or_error("date,steps\n2026-04-02,8000\n2026-04-03,9500\n");
    assert!(v.is_none());
    let e = diags
        .iter()
        .find(|x| x.severity == Severity::Error)
        .expect("an error");
    assert_eq!((e.line, e.column), (Some(1), Some(2)), "{e:#?}");
    let hint = e.hint.as_deref().unwrap_or_default();
    assert!(
        hint.contains("steps alone cannot be turned into activity minutes or energy")
            && hint.contains("`minutes` column"),
        "{hint}"
    );
}

/// Workout exports that give each activity's start and end and no duration (`Start`, `End`):
/// the file was refused for a missing `minutes` column. The minutes are end − start, dated by
/// the start (across midnight too); a row whose end is before its start, that spans more than
/// one activity can last, or whose end has no time of day is dropped with a warning at the
/// end's cell. The same columns in a weigh-in file stay refused, naming both.
#[test]
fn an_activity_file_with_start_and_end_and_no_duration_reads_end_less_start() {
    let (a, diags) = activity_or_error(
        "Activity,Start,End,Distance (km)\n\
         Walking,2026-05-04 07:10:00,2026-05-04 07:52:30,3.6\n\
         Walking,2026-05-07 23:30,2026-05-08 00:15,3.4\n\
         Yoga,2026-05-09T19:00:00+01:00,2026-05-09T19:40:00+01:00,\n\
         Walking,2026-05-10 08:00,2026-05-10 07:30,2.0\n\
         Walking,2026-05-11 08:00,2026-05-12 09:00,9.0\n\
         Walking,2026-05-13 08:00,2026-05-13,2.0\n\
         Walking,2026-05-14 08:00,,2.0\n",
    );
    let got: Vec<(NaiveDate, f64)> = a.unwrap().iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(
        got,
        [
            (d(2026, 5, 4), 42.5),
            (d(2026, 5, 7), 45.0),
            (d(2026, 5, 9), 40.0)
        ]
    );
    let at: Vec<(Option<u64>, Option<u64>)> = diags.iter().map(|x| (x.line, x.column)).collect();
    assert_eq!(
        at,
        [
            (Some(5), Some(3)),
            (Some(6), Some(3)),
            (Some(7), Some(3)),
            (Some(8), Some(3))
        ],
        "{diags:#?}"
    );
    assert_eq!(
        diags[0].message,
        "the activity ends before it starts; the row is dropped"
    );
    assert_eq!(
        diags[0].found.as_deref(),
        Some("start `2026-05-10 08:00`, end `2026-05-10 07:30`")
    );
    assert!(
        diags[1].message.contains("lasts 1500 minutes"),
        "{}",
        diags[1]
    );
    assert!(diags[2].message.contains("no time of day"), "{}", diags[2]);
    assert_eq!(diags[3].message, "`end` is empty; the row is dropped");
    // With a duration column, the start dates the row and the end is not read.
    let (a, diags) = activity_or_error(
        "Workout Type,Start Date,End Date,Duration (s)\n\
         Walking,2026-05-04 07:10:00 +0100,2026-05-04 07:55:00 +0100,2700\n\
         Yoga,2026-05-05 23:40:00 +0100,2026-05-06 00:20:00 +0100,2400\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let got: Vec<(NaiveDate, f64)> = a.unwrap().iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(got, [(d(2026, 5, 4), 45.0), (d(2026, 5, 5), 40.0)]);
    // A date column of its own beside the start and end, which are times of that day: the
    // file was refused, `date` named twice (`Date` and `Start Time`). A time-only end more
    // than 12 hours before its start is after midnight (it was dropped as ending before it
    // starts, while the same UTC times were read); one only a little before it is a slip.
    let (a, diags) = activity_or_error(
        "Date,Activity,Start Time,End Time
         2026-05-04,Walking,07:10,07:52
         2026-05-05,Yoga,7:00 PM,7:40 PM
         2026-05-06,Walking,23:30,00:15
         2026-05-07,Walking,11:40 PM,12:20 AM
         2026-05-08,Walking,08:00,07:30
",
    );
    let got: Vec<(NaiveDate, f64)> = a.unwrap().iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(
        got,
        [
            (d(2026, 5, 4), 42.0),
            (d(2026, 5, 5), 40.0),
            (d(2026, 5, 6), 45.0),
            (d(2026, 5, 7), 40.0)
        ]
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(6), Some(4)));
    assert_eq!(
        diags[0].found.as_deref(),
        Some("start `08:00`, end `07:30`")
    );
    // A start beside the date column and a duration: read, the start not (the file was
    // refused, `date` named twice).
    let (a, diags) = activity_or_error(
        "Date,Start,Activity,Duration\n2026-05-04,07:10,Walking,45 min\n2026-05-05,18:00,Yoga,40\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let got: Vec<(NaiveDate, f64)> = a.unwrap().iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(got, [(d(2026, 5, 4), 45.0), (d(2026, 5, 5), 40.0)]);
    // A weigh-in file's two columns of dates tell no duration and no date: refused.
    let (w, diags) = read(
        "Start,End,Weight (kg)\n2026-05-04 07:12,2026-05-04 07:13,72.5\n",
        &window(),
    );
    assert!(w.is_none());
    assert!(
        diags[0]
            .hint
            .as_deref()
            .is_some_and(|h| h.starts_with("columns `Start` and `End` each hold dates")),
        "{diags:#?}"
    );
}

/// Summary rows at the foot of a weigh-in export: a phrase in the date column (`Total change`,
/// `Weekly average`), or the whole summary in one field (`Average: 88.15 kg`). They are left
/// out with a note naming the first one's line, not read, warned about as rows of the wrong
/// shape, or counted against a date column found by its cells (which refused the file: 5
/// dates of 7 cells). Scales that export the weight in kg and in lb are read from the first.
#[test]
fn summary_rows_at_the_foot_are_left_out_with_a_note_and_two_unit_columns_read_the_first() {
    let read_noted = |text: &str| {
        let ctx = ctx("weights.csv");
        let mut diags = Vec::new();
        let w = parse_weights(text, &CsvOptions::default(), &ctx, &window(), &mut diags);
        let notes: Vec<String> = ctx.take_notes().into_iter().map(|n| n.message).collect();
        (w, diags, notes)
    };
    let (w, diags, notes) = read_noted(
        "Measured,Weight (kg),Change (kg)\n2026-05-04,88.4,\n2026-05-11,87.9,-0.5\n\
         2026-05-18,87.5,-0.4\n2026-05-25,87.6,0.1\n2026-06-01,87.0,-0.6\n,,\n\
         Weekly average,87.7,\nTotal change,,-1.4\nAverage: 87.7 kg\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let kg: Vec<f64> = w.unwrap().iter().map(|x| x.weight.kg()).collect();
    assert_eq!(kg, [88.4, 87.9, 87.5, 87.6, 87.0]);
    assert!(
        notes
            .iter()
            .any(|n| n.contains("3 rows summing up the others (`Weekly average` on line 8)")),
        "{notes:#?}"
    );
    // A word that only contains a label, or a label with digits, is no summary: a date that
    // cannot be read, warned about at its cell.
    let (w, diags, _) =
        read_noted("Date,Weight (kg)\n2026-05-04,88.4\n2026-05-11,87.9\nTotals 2026,87.7\n");
    assert_eq!(w.unwrap().len(), 2);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(4), Some(1)));
    let (w, diags, notes) = read_noted(
        "Date,Weight (kg),Weight (lb),BMI\n2026-05-04,88.4,194.9,29.1\n2026-05-11,87.9,193.8,28.9\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let kg: Vec<f64> = w.unwrap().iter().map(|x| x.weight.kg()).collect();
    assert_eq!(kg, [88.4, 87.9]);
    assert!(
        notes.iter().any(|n| n
            == "columns `Weight (kg)` and `Weight (lb)` give `weight` in two units; `Weight (kg)` is read"),
        "{notes:#?}"
    );
}

/// Summary rows at the foot of a spreadsheet saved in another language: a Dutch `Gemiddelde` and
/// `Totaal verschil`, a French `Moyenne`, a Spanish `Promedio`, an Italian `Media`, a Polish
/// `Średnia`. They were each warned about as "unreadable date … expected: a date like
/// `2026-04-01`", with the hint to write dates so, in a file whose dates had all been read, and
/// every monthly run ended with warnings. They are left out with the note English ones get; a
/// food diary's day total in such a language is checked against the day's rows as `Total` is.
#[test]
fn summary_rows_in_other_languages_are_left_out_with_a_note() {
    for (text, first) in [
        (
            "Datum;Gewicht (kg);Opmerking\n13-4-2026;99,2;\n15-4-2026;99,1;na het sporten\n;;\n\
             Gemiddelde;99,2;\nTotaal verschil;-0,1;\n",
            "2 rows summing up the others (`Gemiddelde` on line 5)",
        ),
        (
            "Date;Poids (kg);Remarques\n01/04/2026;87,9;\n14/04/2026;87,5;\nMoyenne;87,7;\n",
            "`Moyenne` on line 4",
        ),
        (
            "Fecha;Peso (kg)\n1/4/2026;83,6\n13/4/2026;82,7\nPromedio;83,2\nSuma;166,3\n",
            "`Promedio` on line 4",
        ),
        (
            "Data;Peso (kg)\n01/04/2026;69,9\n14/04/2026;69,3\nMedia;69,6\n",
            "`Media` on line 4",
        ),
        (
            "Data;Waga (kg)\n01.04.2026;111,7\n19.04.2026;111,6\nŚrednia;111,7\n",
            "`Średnia` on line 4",
        ),
    ] {
        let ctx = ctx("weights.csv");
        let mut diags = Vec::new();
        // Mapped as the GUIDE says (`input.columns`), keyed as `header_key` writes them.
        let map: ColumnMap = [
            ("data", "date"),
            ("fecha", "date"),
            ("poids", "weight"),
            ("peso", "weight"),
            ("waga", "weight"),
        ]
        .map(|(theirs, ours)| (theirs.to_string(), ours.to_string()))
        .into();
        let opts = CsvOptions {
            columns: Arc::new([("weights".to_string(), map)].into()),
            ..CsvOptions::default()
        };
        let w = parse_weights(text, &opts, &ctx, &window(), &mut diags);
        let notes: Vec<String> = ctx.take_notes().into_iter().map(|n| n.message).collect();
        assert!(diags.is_empty(), "{text}: {diags:#?}");
        assert_eq!(w.unwrap().len(), 2, "{text}");
        assert!(
            notes.iter().any(|n| n.contains(first)),
            "{text}: {notes:#?}"
        );
    }
    let ctx = ctx("intake.csv");
    let mut diags = Vec::new();
    let i = parse_intake(
        "Datum;Maaltijd;Kalorien\n2026-05-04;Ontbijt;400\n2026-05-04;Lunch;600\n2026-05-04;Totaal;1000\n",
        &CsvOptions::default(),
        &ctx,
        &window(),
        &mut diags,
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let kcal: Vec<f64> = i.unwrap().iter().map(|x| x.kcal).collect();
    assert_eq!(kcal, [1000.0]);
}

/// One impossible date in a spreadsheet of numeric dates (`31/04/2026` typed for 30 April, or
/// `4/31/2026` month first: no order reads it, as 31 April is no day and there is no month 31)
/// left the file with no order that reads every date, and then every numeric date was
/// "unreadable": the whole file was lost ("no row of the file could be read: 13 rows
/// dropped"), for one typo. Such a date tells nothing of the order: the others decide it, and
/// only its own row is dropped, with a warning at its cell.
#[test]
fn one_impossible_numeric_date_costs_its_row_not_the_file() {
    for (text, line, days) in [
        (
            "Date;Gewicht (kg)\n01/04/2026;69,9\n14/04/2026;69,3\n31/04/2026;69,5\n01/05/2026;68,1\n",
            4,
            [(4, 1), (4, 14), (5, 1)],
        ),
        (
            "Date,Weight (lb),Notes\n4/1/2026,250.9,\n4/13/2026,250.2,\n4/31/2026,249.0,typo\n5/2/2026,248.2,\n",
            4,
            [(4, 1), (4, 13), (5, 2)],
        ),
    ] {
        let mut diags = Vec::new();
        let w = parse_weights(
            text,
            &CsvOptions::default(),
            &ctx("weights.csv"),
            &window(),
            &mut diags,
        )
        .expect("the file is read");
        let dates: Vec<NaiveDate> = w.iter().map(|x| x.date).collect();
        assert_eq!(dates, days.map(|(m, day)| d(2026, m, day)), "{text}");
        assert_eq!(diags.len(), 1, "{text}: {diags:#?}");
        assert_eq!((diags[0].line, diags[0].column), (Some(line), Some(1)));
        assert_eq!(diags[0].severity, Severity::Warning);
        // Said as a day the calendar lacks, in the file's own order, not as a date in the
        // wrong form ("expected: a date like `2026-04-01` (format `%Y-%m-%d`)").
        let said = diags[0].to_string();
        assert!(said.contains("no such day; the row is dropped"), "{said}");
        assert!(
            said.contains("day 31 of month 4, which has 30 days in 2026"),
            "{said}"
        );
        assert!(!said.contains("%Y-%m-%d"), "{said}");
    }
    // A typo that is no numeric date at all (`1O/05/2026`, a letter O) in such a file: the
    // warning asks for a date like the file's others, not for the program's `%Y-%m-%d`.
    let mut diags = Vec::new();
    let w = parse_weights(
        "Date;Gewicht (kg)\n01/04/2026;69,9\n14/04/2026;69,3\n1O/05/2026;69,5\n",
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert_eq!(w.map(|w| w.len()), Some(2));
    assert_eq!(diags.len(), 1, "{diags:#?}");
    let said = diags[0].to_string();
    assert!(
        said.contains("expected: a date written day first as the file's other dates (`14/04/2026` = 2026-04-14)"),
        "{said}"
    );
    assert!(!said.contains("%Y-%m-%d"), "{said}");
    // Two-digit years keep their refusal: `14/05/19` is no date within a 2026 program.
    let mut diags = Vec::new();
    let opts = CsvOptions {
        program_span: Some((d(2026, 4, 1), d(2026, 9, 30))),
        ..CsvOptions::default()
    };
    let w = parse_weights(
        "date,weight,unit\n01/05/26,80,kg\n14/05/19,80,kg\n",
        &opts,
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none(), "{diags:#?}");
}

/// A spreadsheet in another language (`Date;Poids (kg);Remarques`, a food app's `Énergie
/// (kcal)`): the file was refused for missing `weight` and `unit` with the hint to map
/// "Their name", though one column not read names the unit the missing column takes. The hint
/// now names that column and gives the mapping to copy, and says the unit comes with it.
/// Two such columns (`Poids (kg)`, `Masse grasse (kg)`) leave the choice open: the plain hint.
#[test]
fn a_missing_value_column_whose_unit_a_column_names_gets_the_mapping_to_copy() {
    let hint_of = |diags: &[Diagnostic]| {
        assert_eq!(diags.len(), 1, "{diags:#?}");
        diags[0].hint.clone().unwrap_or_default()
    };
    let mut diags = Vec::new();
    let w = parse_weights(
        "Date;Poids (kg);Remarques\n01/04/2026;87,9;\n14/04/2026;87,5;après le sport\n",
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(w.is_none());
    let hint = hint_of(&diags);
    assert!(
        hint.contains(
            "`Poids (kg)` (column 2) names a unit of `weight` (kg) in its header; if it holds the weight, map it in program.yaml: `input: { columns: { weights: { \"Poids\": weight } } }`"
        ),
        "{hint}"
    );
    assert!(hint.contains("`unit` is then not needed"), "{hint}");
    // (`Énergie (kcal)` is read as the alias `energie` since accents are folded in header
    // names; a name that is no alias still gets the mapping, accents and all.)
    let mut diags = Vec::new();
    let i = parse_intake(
        "Date;Repas;Aliment;Valeur énergétique (kcal)\n2026-04-01;Déjeuner;Salade;420\n",
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    );
    assert!(i.is_none());
    let hint = hint_of(&diags);
    assert!(
        hint.contains("{ intake: { \"Valeur énergétique\": kcal } }"),
        "{hint}"
    );
    assert!(!hint.contains("not needed"), "{hint}");
    let mut diags = Vec::new();
    parse_weights(
        "Date;Poids (kg);Masse grasse (kg)\n01/04/2026;87,9;30,1\n",
        &CsvOptions::default(),
        &ctx("weights.csv"),
        &window(),
        &mut diags,
    );
    assert!(
        hint_of(&diags).contains("\"Their name\": weight"),
        "{diags:#?}"
    );
}

/// A header that says how its clock durations are written (`Duration (h:mm)`, `Duration
/// (mm:ss)`): the file was refused, the unit not understood; and without it a one-colon
/// duration that fits both readings was dropped. A bare number under such a header could be
/// minutes, hours or seconds, and costs its row.
#[test]
fn a_header_naming_the_clock_form_of_its_durations_tells_their_reading() {
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration (h:mm)\n2026-05-04,brisk walk,0:45\n2026-05-05,Yoga,1:10\n2026-05-06,Yoga,40\n",
    );
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [45.0, 70.0]);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(4), Some(3)));
    assert_eq!(diags[0].found.as_deref(), Some("`40`"));
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration (mm:ss)\n2026-05-04,brisk walk,12:30\n2026-05-05,Yoga,1:10:00\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [12.5, 70.0]);
}

/// The median of a sorted window without one copy of a value, read off by rank, is the median
/// of the rest gathered one by one (as the unit check did per weigh-in): odd and even counts,
/// repeated values, a value not in the window (implausible), one value alone.
#[test]
fn median_without_is_the_median_of_the_rest() {
    let mut seed = 7u64;
    let mut next = || {
        seed = seed
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        seed >> 33
    };
    for n in 1..40 {
        let values: Vec<f64> = (0..n).map(|_| 60.0 + (next() % 12) as f64 / 2.0).collect();
        let mut sorted = values.clone();
        sorted.sort_unstable_by(f64::total_cmp);
        for (i, &v) in values.iter().enumerate() {
            let mut rest: Vec<f64> = values
                .iter()
                .enumerate()
                .filter(|&(j, _)| j != i)
                .map(|(_, &x)| x)
                .collect();
            let expected = (!rest.is_empty()).then(|| median(&mut rest));
            assert_eq!(
                median_without(&sorted, v),
                expected,
                "{values:?} without {v}"
            );
        }
        // A value outside the window (an implausible one) leaves every value in.
        let mut all = values.clone();
        assert_eq!(median_without(&sorted, 5000.0), Some(median(&mut all)));
    }
}

/// An activity given as start and end clock times across a daylight-saving change, with
/// `input.time_zone: Europe/Berlin` (clocks forward 02:00 → 03:00 on 2026-03-29, back 03:00 →
/// 02:00 on 2026-10-25; IANA tzdata): the span was end − start on one clock, an hour too long
/// in spring and an hour too short in autumn. It is now the time between the two instants. A
/// local time in the skipped hour is a warning at its cell (row dropped); one in the repeated
/// hour is taken at the earlier offset (+02:00), with a warning at its cell saying so. Times
/// written with their offsets are those instants. Without a zone the clock times are taken as
/// written, as before.
#[test]
fn an_activity_across_a_daylight_saving_change_lasts_what_it_lasted_in_the_programs_zone() {
    let text = "Activity,Start,End\n\
                Walking,2026-03-29 01:30,2026-03-29 03:30\n\
                Walking,2026-10-25 01:30,2026-10-25 03:30\n\
                Walking,2026-03-29 02:30,2026-03-29 03:45\n\
                Walking,2026-10-25 02:30,2026-10-25 03:30\n\
                Walking,2026-10-25T02:30:00+01:00,2026-10-25T03:30:00+01:00\n\
                Walking,2026-05-04 07:10,2026-05-04 07:52\n";
    let read = |zone: Option<&str>| {
        let opts = CsvOptions {
            time_zone: zone.and_then(LocalZone::parse),
            ..Default::default()
        };
        let mut diags = Vec::new();
        let w = Window {
            enrolled: Some(d(2026, 3, 1)),
            ..window()
        };
        let a = parse_activity(text, &opts, &ctx("activity.csv"), &w, &mut diags).expect("usable");
        let got: Vec<(NaiveDate, f64)> = a.iter().map(|x| (x.date, x.minutes)).collect();
        (got, diags)
    };
    let (got, diags) = read(Some("Europe/Berlin"));
    assert_eq!(
        got,
        [
            (d(2026, 3, 29), 60.0),
            (d(2026, 5, 4), 42.0),
            (d(2026, 10, 25), 180.0),
            (d(2026, 10, 25), 120.0),
            (d(2026, 10, 25), 60.0),
        ]
    );
    let at: Vec<(Option<u64>, Option<u64>, Option<&str>)> = diags
        .iter()
        .map(|x| (x.line, x.column, x.field.as_deref()))
        .collect();
    assert_eq!(
        at,
        [
            (Some(4), Some(2), Some("date")),
            (Some(5), Some(2), Some("date"))
        ],
        "{diags:#?}"
    );
    assert!(
        diags
            .iter()
            .all(|x| x.file == "participants/P1/activity.csv")
    );
    assert_eq!(
        diags[0].message,
        "`2026-03-29 02:30` does not exist in Europe/Berlin (the clocks go forward an hour that night), so the activity's duration cannot be told; the row is dropped"
    );
    assert_eq!(
        diags[0].found.as_deref(),
        Some("start `2026-03-29 02:30`, end `2026-03-29 03:45`")
    );
    assert_eq!(
        diags[1].message,
        "`2026-10-25 02:30` happens twice in Europe/Berlin (the clocks go back an hour that night); read as the first, at +02:00 (the earlier offset), not +01:00"
    );
    // Without a zone: end − start as written, the three DST rows included.
    let (got, diags) = read(None);
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(
        got,
        [
            (d(2026, 3, 29), 120.0),
            (d(2026, 3, 29), 75.0),
            (d(2026, 5, 4), 42.0),
            (d(2026, 10, 25), 120.0),
            (d(2026, 10, 25), 60.0),
            (d(2026, 10, 25), 60.0),
        ]
    );
}

/// A weigh-in row pasted twice in an export without times (`07/09/2026,81.5,home scale`): both
/// are read (two weigh-ins can read the same), and the README promised `check` notes them, but
/// only intake and activity files had the note: the weights file said nothing.
#[test]
fn identical_weigh_ins_without_a_time_are_read_and_noted() {
    let c = ctx("weights.csv");
    let mut diags = Vec::new();
    let w = parse_weights(
        "date,weight,unit,source\n2026-04-02,81.5,kg,home scale\n2026-04-03,81.2,kg,home scale\n\
         2026-04-02,81.5,kg,home scale\n2026-04-04,81.0,kg,clinic\n2026-04-04,81.0,kg,home scale\n",
        &CsvOptions::default(),
        &c,
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(w.len(), 5, "each is read");
    let notes: Vec<String> = c.take_notes().into_iter().map(|n| n.message).collect();
    assert!(
        notes.contains(
            &"identical weigh-ins without a time of day on the same day are each read as a \
              weigh-in: 2026-04-02 (lines 2, 4); delete one only if it was entered twice"
                .to_string()
        ),
        "{notes:#?}"
    );
}

/// A one-colon duration nothing in the file settles (`0:45`): the hint named only a new
/// export, not the header form the README gives (`Duration (h:mm)`), which reads them as is.
#[test]
fn an_unsettled_one_colon_duration_names_the_header_that_settles_it() {
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration\n2026-04-01,brisk walk,0:45\n2026-04-02,Yoga,30\n",
    );
    assert_eq!(a.unwrap().len(), 1);
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(
        diags[0].hint.as_deref(),
        Some(
            "say which in the column's header: `Duration (h:mm)` for hours:minutes or \
             `Duration (mm:ss)` for minutes:seconds; or export durations as h:mm:ss or in minutes"
        )
    );
    // The header the hint gives reads the file.
    let (a, diags) = activity_or_error(
        "Date,Activity,Duration (h:mm)\n2026-04-01,brisk walk,0:45\n2026-04-02,Yoga,1:30\n",
    );
    assert!(diags.is_empty(), "{diags:#?}");
    let minutes: Vec<f64> = a.unwrap().iter().map(|x| x.minutes).collect();
    assert_eq!(minutes, [45.0, 90.0]);
}

/// Start and end as times of day alone under headers that say UTC (`Start Time (UTC)`,
/// `End Time (UTC)`, beside a `Date` column): each is that time on the row's date in UTC,
/// converted to `input.time_zone` as a weigh-in's UTC time is, and the row counts on the
/// start's local day. They were read as local times: in America/New_York (UTC−4 in September;
/// IANA tzdata) a walk from 02:00 to 02:40 UTC on Monday 14 Sep 2026 counted on the 14th (the
/// next week) rather than on the evening of Sunday the 13th. Without a zone they stay on their
/// UTC day, as a weigh-in's do. A start and end beside a date with no UTC in their headers
/// are local times, as before.
#[test]
fn activity_times_of_day_under_a_utc_header_are_converted_to_the_programs_zone() {
    let utc = "Date,Start Time (UTC),End Time (UTC),Activity\n\
               2026-09-14,02:00,02:40,Walking\n\
               2026-09-15,12:00,12:30,Walking\n\
               2026-09-16,03:50,03:40,Walking\n";
    let read = |text: &str, zone: Option<&str>| {
        let opts = CsvOptions {
            time_zone: zone.and_then(LocalZone::parse),
            ..Default::default()
        };
        let mut diags = Vec::new();
        let cx = ctx("activity.csv");
        let a = parse_activity(text, &opts, &cx, &window(), &mut diags).expect("usable");
        let got: Vec<(NaiveDate, f64)> = a.iter().map(|x| (x.date, x.minutes)).collect();
        let warnings: Vec<(Option<u64>, Option<u64>, String)> = diags
            .iter()
            .filter(|x| x.severity == Severity::Warning)
            .map(|x| (x.line, x.column, x.message.clone()))
            .collect();
        let notes: Vec<String> = cx.take_notes().into_iter().map(|n| n.message).collect();
        (got, warnings, notes)
    };
    let ends_before = "the activity ends before it starts; the row is dropped".to_string();
    let (got, warnings, notes) = read(utc, Some("America/New_York"));
    assert_eq!(got, [(d(2026, 9, 13), 40.0), (d(2026, 9, 15), 30.0)]);
    // An end before its start on the same UTC day is still dropped, at the end's cell.
    assert_eq!(warnings, [(Some(4), Some(3), ends_before.clone())]);
    assert!(
        notes
            .iter()
            .any(|n| n.contains("UTC times converted to America/New_York")),
        "{notes:#?}"
    );
    // Without a zone: on the UTC day.
    let (got, ..) = read(utc, None);
    assert_eq!(got, [(d(2026, 9, 14), 40.0), (d(2026, 9, 15), 30.0)]);
    // Across UTC midnight (19:30 to 20:30 in New York): the end is on the next UTC day, and
    // the hour counts on the local evening's day; the slip of 03:50 to 03:40 is still dropped.
    let across = "Date,Start Time (UTC),End Time (UTC),Activity\n\
                  2026-09-14,23:30,00:30,Walking\n\
                  2026-09-16,03:50,03:40,Walking\n";
    let (got, warnings, _) = read(across, Some("America/New_York"));
    assert_eq!(got, [(d(2026, 9, 14), 60.0)]);
    assert_eq!(warnings, [(Some(3), Some(3), ends_before.clone())]);
    let (got, ..) = read(across, None);
    assert_eq!(got, [(d(2026, 9, 14), 60.0)]);
    // No UTC in the headers: local times, on the row's date, as before.
    let local = utc.replace(" (UTC)", "");
    let (got, warnings, _) = read(&local, Some("America/New_York"));
    assert_eq!(got, [(d(2026, 9, 14), 40.0), (d(2026, 9, 15), 30.0)]);
    assert_eq!(warnings, [(Some(4), Some(3), ends_before.clone())]);
    // Local times across midnight: the same rule as UTC ones (the hour counts on the start's
    // day; the slip is dropped). They were dropped as ending before they start.
    let local_across = across.replace(" (UTC)", "");
    let (got, warnings, _) = read(&local_across, Some("America/New_York"));
    assert_eq!(got, [(d(2026, 9, 14), 60.0)]);
    assert_eq!(warnings, [(Some(3), Some(3), ends_before.clone())]);
    let (got, ..) = read(&local_across, None);
    assert_eq!(got, [(d(2026, 9, 14), 60.0)]);
    // On the night the clocks go back (Europe/Berlin, 25 Oct 2026, 03:00 → 02:00; IANA
    // tzdata), 23:30 to 03:30 lasts five hours, not four.
    let (got, ..) = read(
        "Date,Start Time,End Time,Activity\n2026-10-24,23:30,03:30,Walking\n",
        Some("Europe/Berlin"),
    );
    assert_eq!(got, [(d(2026, 10, 24), 300.0)]);
}

/// An unquoted comma inside a text value, on a row whose last column is empty
/// (`2026-03-02,walk, brisk,30,` under `Date,Activity,Minutes,Notes`), gives the row one field
/// too many with the last empty: it was read as ending in a delimiter, shifted, and the
/// warning was "not a number in `minutes`" at `brisk`. It is now the field too many, at the
/// line and field of the comma, with how to quote the value; the same in intake and weights
/// files. A comma in an unread note after every column read costs nothing: the row is read.
#[test]
fn a_comma_inside_a_label_is_a_field_too_many_at_the_comma() {
    let warnings = |diags: &[Diagnostic]| -> Vec<(Option<u64>, Option<u64>, Option<String>)> {
        diags
            .iter()
            .filter(|x| x.severity == Severity::Warning)
            .map(|x| (x.line, x.column, x.field.clone()))
            .collect()
    };
    // Activity: the label split, the notes empty.
    let text = "Date,Activity,Minutes,Notes\n\
                2026-05-01,Cycling,30,\n\
                2026-05-02,walk, brisk,30,\n\
                2026-05-03,Walking,45,felt good\n";
    let mut diags = Vec::new();
    let a = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    let got: Vec<(NaiveDate, f64)> = a.iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(got, [(d(2026, 5, 1), 30.0), (d(2026, 5, 3), 45.0)]);
    assert_eq!(
        warnings(&diags),
        [(Some(3), Some(2), Some("Activity".to_string()))]
    );
    let w = &diags[0];
    assert_eq!(
        w.message,
        "row has one field too many (5 for the 4 columns of the header): the `,` in `Activity` value `walk, brisk` (field 2) is read as a delimiter; the row is dropped"
    );
    assert_eq!(
        w.hint.as_deref(),
        Some("quote the value: `\"walk, brisk\"` (or write it without the `,`)")
    );
    // Quoted as the hint says, the row is read.
    let mut diags = Vec::new();
    let a = parse_activity(
        &text.replace("walk, brisk", "\"walk, brisk\""),
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(a.len(), 3, "{diags:#?}");
    assert_eq!(a[1].minutes, 30.0);

    // Intake: a food's name split, its notes empty.
    let text = "Date,Food,kcal,Notes\n\
                2026-05-01,Porridge,320,\n\
                2026-05-01,Toast, buttered,250,\n\
                2026-05-02,Soup,400,\n";
    let mut diags = Vec::new();
    let days = parse_intake(
        text,
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    let got: Vec<(NaiveDate, f64)> = days.iter().map(|x| (x.date, x.kcal)).collect();
    assert_eq!(got, [(d(2026, 5, 1), 320.0), (d(2026, 5, 2), 400.0)]);
    assert_eq!(
        warnings(&diags),
        [(Some(3), Some(2), Some("Food".to_string()))]
    );

    // Weights: a source split is dropped there; a comma in the unread note at the end is not.
    let (w, diags) = weights(
        "date,weight,unit,source,notes\n\
         2026-05-01,81.5,kg,home,\n\
         2026-05-02,81.2,kg,clinic, room 2,\n\
         2026-05-03,81.0,kg,home,after a run, tired\n",
    );
    let got: Vec<f64> = w.iter().map(|x| x.weight.kg()).collect();
    assert_eq!(got, [81.5, 81.0]);
    assert_eq!(
        warnings(&diags),
        [(Some(3), Some(4), Some("source".to_string()))]
    );
}

/// Two unquoted commas in a label (`2026-05-02,walk, brisk, uphill,30,` under
/// `Date,Activity,Minutes,Notes`) gave the generic "row has 6 fields but the header has 4 …
/// quote text containing the delimiter", where one comma named the value and its field. The
/// same warning now names both: at the line and field of the value, with how to quote it. Two
/// commas in an unread note after every column read cost nothing, as one does.
#[test]
fn two_commas_inside_a_label_are_named_as_one_does() {
    let text = "Date,Activity,Minutes,Notes\n\
                2026-05-01,Cycling,30,\n\
                2026-05-02,walk, brisk, uphill,30,\n\
                2026-05-03,Walking,45,after work, tired, happy\n";
    let mut diags = Vec::new();
    let a = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    let got: Vec<(NaiveDate, f64)> = a.iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(got, [(d(2026, 5, 1), 30.0), (d(2026, 5, 3), 45.0)]);
    let w: Vec<&Diagnostic> = diags
        .iter()
        .filter(|x| x.severity == Severity::Warning)
        .collect();
    assert_eq!(w.len(), 1, "{diags:#?}");
    assert_eq!(
        w[0].message,
        "row has two fields too many (6 for the 4 columns of the header): the two `,` in `Activity` value `walk, brisk, uphill` (field 2) are read as delimiters; the row is dropped"
    );
    assert_eq!((w[0].line, w[0].column), (Some(3), Some(2)));
    assert_eq!(w[0].field.as_deref(), Some("Activity"));
    assert_eq!(
        w[0].hint.as_deref(),
        Some("quote the value: `\"walk, brisk, uphill\"` (or write it without the `,`)")
    );
    // Quoted as the hint says, the row is read.
    let mut diags = Vec::new();
    let a = parse_activity(
        &text.replace("walk, brisk, uphill", "\"walk, brisk, uphill\""),
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(a.len(), 3, "{diags:#?}");
    // Three commas and no notes column.
    let mut diags = Vec::new();
    parse_activity(
        "Date,Activity,Minutes\n2026-05-01,Cycling,30\n2026-05-02,walk, brisk, uphill, windy,30\n",
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert!(
        diags.iter().any(|x| x.message
            == "row has three fields too many (6 for the 3 columns of the header): the three `,` in `Activity` value `walk, brisk, uphill, windy` (field 2) are read as delimiters; the row is dropped"),
        "{diags:#?}"
    );
}

/// An unquoted comma inside a text value that leaves the row with exactly the header's number
/// of fields (`2026-03-02,walk, brisk,30,` under `date,activity,minutes,met,notes`: the empty
/// note absorbs the extra field) read shifted, with "not a number in `minutes`" at ` brisk`
/// and a hint to write a number "(no words)": nothing named the comma. The warning now says
/// the `,` in `walk, brisk` is likely the cause and how to quote it. A number column holding a
/// word with no text before it (`abc`) keeps its hint.
#[test]
fn a_comma_inside_a_label_that_keeps_the_header_s_width_is_named_as_the_cause() {
    let text = "date,activity,minutes,met,notes\n\
                2026-05-02,walk, brisk,30,\n\
                2026-05-03,Cycling,abc,6,\n\
                2026-05-04,Walking,45,3.5,\n";
    let mut diags = Vec::new();
    let a = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    let got: Vec<(NaiveDate, f64)> = a.iter().map(|x| (x.date, x.minutes)).collect();
    assert_eq!(got, [(d(2026, 5, 4), 45.0)]);
    let warnings: Vec<&Diagnostic> = diags
        .iter()
        .filter(|x| x.severity == Severity::Warning)
        .collect();
    assert_eq!(warnings.len(), 2, "{diags:#?}");
    let w = warnings[0];
    assert_eq!((w.line, w.column), (Some(2), Some(3)));
    assert!(w.message.starts_with("not a number in `minutes`"), "{w}");
    assert_eq!(
        w.hint.as_deref(),
        Some(
            "the `,` in the `activity` value `walk, brisk` is likely read as a delimiter, moving `brisk` and every value after it one column on: quote the value: `\"walk, brisk\"` (or write it without the `,`)"
        )
    );
    let w = warnings[1];
    assert_eq!((w.line, w.column), (Some(3), Some(3)));
    assert!(
        w.hint
            .as_deref()
            .is_some_and(|h| h.starts_with("write a number such as `45`")),
        "{w}"
    );
    // Quoted as the hint says, the row is read.
    let mut diags = Vec::new();
    let a = parse_activity(
        &text.replace("walk, brisk", "\"walk, brisk\""),
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(a.len(), 2, "{diags:#?}");
    assert_eq!((a[0].date, a[0].minutes), (d(2026, 5, 2), 30.0));

    // Intake: `Toast, buttered` before kcal, the notes empty.
    let mut diags = Vec::new();
    let days = parse_intake(
        "Date,Food,kcal,Notes\n2026-05-02,Toast, buttered,250\n2026-05-03,Soup,400,\n",
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(days.len(), 1);
    let w = diags
        .iter()
        .find(|x| x.severity == Severity::Warning)
        .expect("a warning");
    assert!(
        w.hint
            .as_deref()
            .is_some_and(|h| h.starts_with("the `,` in the `Food` value `Toast, buttered`")),
        "{w}"
    );
}

/// An intake file whose energy column is headed by its unit alone (`kJ`, `KJ`, `Cal`) was
/// refused ("missing required column `kcal`") while `Energy (kJ)` was read. It is now the
/// energy column in that unit, converted as `Energy (kJ)` is; beside another energy column,
/// that one is read and the unit alone is left as a column of another export.
#[test]
fn an_energy_column_headed_by_its_unit_alone_is_read_in_that_unit() {
    let parse = |text: &str| {
        let c = ctx("intake.csv");
        let mut diags = Vec::new();
        let v = parse_intake(text, &CsvOptions::default(), &c, &window(), &mut diags);
        (v, diags, c.take_notes())
    };
    for header in ["kJ", "KJ", "kj", " kJ "] {
        let (v, d, notes) = parse(&format!(
            "date,{header}\n2026-04-01,8000\n2026-04-02,7600\n2026-04-03,9100\n"
        ));
        assert!(d.is_empty(), "{header}: {d:#?}");
        let got: Vec<f64> = v.expect(header).iter().map(|x| x.kcal).collect();
        assert_eq!(
            got,
            [8000.0 / 4.184, 7600.0 / 4.184, 9100.0 / 4.184],
            "{header}"
        );
        assert!(
            notes.iter().any(|n| n.message
                == format!(
                    "column `{}` read as `kcal`; `kcal` in kJ (from the header), converted to kcal at 4.184 kJ/kcal",
                    header.trim()
                )),
            "{header}: {notes:#?}"
        );
    }
    // `kcal` and `Cal` alone are kcal.
    for header in ["kcal", "KCAL", "Cal"] {
        let (v, d, _) = parse(&format!("date,{header}\n2026-04-01,1850\n"));
        assert!(d.is_empty(), "{header}: {d:#?}");
        assert_eq!(v.expect(header)[0].kcal, 1850.0, "{header}");
    }
    // Beside an energy column of its own name, the unit alone is not read.
    let (v, d, _) = parse("date,Energy (kcal),kJ\n2026-04-01,1850,7740\n");
    assert!(d.is_empty(), "{d:#?}");
    assert_eq!(v.unwrap()[0].kcal, 1850.0);
}

/// The comma rules named a delimiter inside a value only where a space followed it, and only
/// for a number that did not read. Before: `2026-05-02,walk,brisk,30` under
/// `date,activity,minutes` and `2026-05-02,1,234,80` under `date,kcal,protein_g` gave "row has
/// 4 fields but the header has 3" (the second with the hint "a decimal comma (`72,5`) splits
/// a number"); `Walk,talk,2026-05-14,yes` under `session,date,attended,notes` gave "unreadable
/// date" with a hint on date formats, and `clinic,room 2` before the unit "unknown weight
/// unit" with none. Now each names the `,` and says to quote the value. A row that is merely
/// wrong (`abc` minutes, `lbx` unit, `30,40` minutes) keeps its old words.
#[test]
fn a_comma_with_no_space_or_in_a_number_or_before_a_date_or_unit_is_named() {
    let warnings = |diags: &[Diagnostic]| -> Vec<(Option<u64>, Option<u64>, String, String)> {
        diags
            .iter()
            .filter(|x| x.severity == Severity::Warning)
            .map(|x| {
                (
                    x.line,
                    x.column,
                    x.message.clone(),
                    x.hint.clone().unwrap_or_default(),
                )
            })
            .collect()
    };
    let quote = |v: &str| format!("quote the value: `\"{v}\"` (or write it without the `,`)");
    let moved = |col: &str, v: &str, m: &str| {
        format!(
            "the `,` in the `{col}` value `{v}` is likely read as a delimiter, moving `{m}` and every value after it one column on: {}",
            quote(v)
        )
    };
    // (a) No space after the comma, in a text value: one field too many.
    let mut diags = Vec::new();
    let a = parse_activity(
        "date,activity,minutes\n2026-05-02,walk,brisk,30\n2026-05-03,walking,abc\n2026-05-04,walking,30,40\n2026-05-05,walking,45\n",
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(a.len(), 1);
    let w = warnings(&diags);
    assert_eq!(w.len(), 3, "{w:#?}");
    assert_eq!(
        w[0],
        (
            Some(2),
            Some(2),
            "row has one field too many (4 for the 3 columns of the header): the `,` in `activity` value `walk,brisk` (field 2) is read as a delimiter; the row is dropped".to_string(),
            quote("walk,brisk")
        )
    );
    // Merely wrong rows: no comma named (the shape warnings come first).
    assert!(w[2].2.starts_with("not a number in `minutes`"), "{w:#?}");
    assert!(w[2].3.starts_with("write a number such as `45`"), "{w:#?}");
    assert!(
        w[1].2.starts_with("row has 4 fields but the header has 3"),
        "{w:#?}"
    );
    assert!(w[1].3.starts_with("a decimal comma (`72,5`)"), "{w:#?}");

    // (c) A number's thousands split: `1,234` kcal.
    let mut diags = Vec::new();
    let days = parse_intake(
        "date,kcal,protein_g\n2026-05-02,1,234,80\n2026-05-03,1500,70\n",
        &CsvOptions::default(),
        &ctx("intake.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(days.len(), 1);
    let w = warnings(&diags);
    assert_eq!(
        w,
        [(
            Some(2),
            Some(2),
            "row has one field too many (4 for the 3 columns of the header): the `,` in `kcal` value `1,234` (field 2) is read as a delimiter; the row is dropped".to_string(),
            quote("1,234")
        )]
    );

    // (b) The split moves a date: the row keeps the header's width (the notes left off).
    let mut diags = Vec::new();
    let s = parse_sessions(
        "session,date,attended,notes\nS01 Start,2026-05-07,yes\nWalk,talk,2026-05-14,yes\nS03,someday,yes\n",
        &CsvOptions::default(),
        &ctx("sessions.csv"),
        &window(),
        &mut diags,
    )
    .expect("usable");
    assert_eq!(s.len(), 1);
    let w = warnings(&diags);
    assert_eq!(w.len(), 2, "{w:#?}");
    assert_eq!(
        (w[0].0, w[0].1, w[0].3.as_str()),
        (
            Some(3),
            Some(2),
            moved("session", "Walk,talk", "talk").as_str()
        )
    );
    assert!(w[0].2.starts_with("unreadable date"), "{w:#?}");
    // `someday` after `S03`: no date follows it, so no comma is named.
    assert!(w[1].3.starts_with("write dates like"), "{w:#?}");

    // (b) The split moves a unit (and the time after it: `kg` is no time), with or without a
    // space after the comma.
    let (got, diags) = weights(
        "date,weight,source,unit,time\n2026-05-01,69.5,home,kg\n2026-05-06,69.2,clinic,room 2,kg\n2026-05-07,69.0,clinic, room 2,kg\n2026-05-08,69.1,clinic,lbx\n",
    );
    assert_eq!(got.len(), 1);
    let w = warnings(&diags);
    assert_eq!(w.len(), 3, "{w:#?}");
    assert_eq!(
        (w[0].0, w[0].1, w[0].3.as_str()),
        (
            Some(3),
            Some(4),
            moved("source", "clinic,room 2", "room 2").as_str()
        )
    );
    assert_eq!(
        w[1].3,
        moved("source", "clinic, room 2", "room 2"),
        "{w:#?}"
    );
    assert!(
        w[2].2.starts_with("unknown weight unit") && w[2].3.is_empty(),
        "{w:#?}"
    );
}

#[test]
fn implausible_macro_grams_are_not_read() {
    // 99,999,999 g of protein beside 10 kcal was read without a word and reached the reports
    // and external modules.
    let (v, diags) = intake(
        "date,carbs_g,fat_g,protein_g,kcal,free_sugars_g\n2026-04-01,200,70,99999999,2000,5\n2026-04-02,250,70,3000,2100,4000\n",
    );
    assert_eq!(diags.len(), 3, "{diags:#?}");
    let at: Vec<_> = diags.iter().map(|d| (d.line, d.column)).collect();
    assert_eq!(
        at,
        [(Some(2), Some(4)), (Some(3), Some(4)), (Some(3), Some(6))]
    );
    assert!(
        diags[0]
            .message
            .contains("implausible `protein_g`; the value is ignored")
    );
    // 10,000 kcal a day (the most intake a day holds) is 2,500 g at 4 kcal/g.
    assert!(
        diags[0].to_string().contains("at most 2,500 g"),
        "{}",
        diags[0]
    );
    assert!(diags[0].to_string().contains("`99999999`"), "{}", diags[0]);
    assert_eq!(v.len(), 2);
    assert_eq!(v[0].protein_g, None);
    assert_eq!((v[0].carbs_g, v[0].fat_g), (Some(200.0), Some(70.0)));
    assert_eq!(v[1].protein_g, None);
    assert_eq!(v[1].free_sugars_g, None);
    assert_eq!(v[1].kcal, 2100.0);
    // Fat is 9 kcal/g: 1,111 g is the most, 1,112 g is not read.
    let (v, diags) = intake("date,kcal,fat_g\n2026-04-01,9000,1111\n2026-04-02,9000,1112\n");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(3));
    assert_eq!((v[0].fat_g, v[1].fat_g), (Some(1111.0), None));
}

#[test]
fn grams_far_above_the_rows_energy_drop_the_row() {
    // The row of the report: kcal 10 with 10 g carbohydrate and 10 g fat (130 kcal) and an
    // impossible protein.
    let (v, diags) = intake(
        "date,kcal,carbs_g,fat_g,protein_g,free_sugars_g\n2026-05-04,10,10,10,99999999,5\n2026-05-04,600,60,20,30,10\n",
    );
    assert_eq!(diags.len(), 2, "{diags:#?}");
    assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(5)));
    assert_eq!((diags[1].line, diags[1].column), (Some(2), Some(2)));
    assert!(
        diags[1]
            .message
            .contains("far more energy than its kcal; the row is dropped"),
        "{}",
        diags[1]
    );
    // 2 × 10 + 100 = 120 kcal at most; 10 × 4 + 10 × 9 = 130 found.
    let text = diags[1].to_string();
    assert!(
        text.contains("(120 kcal)") && text.contains("(130 kcal)"),
        "{text}"
    );
    assert_eq!(v.len(), 1);
    assert_eq!(v[0].kcal, 600.0);
    assert_eq!(v[0].protein_g, Some(30.0));
    // A protein of 400 g (1,600 kcal) beside 150 kcal (a dropped digit of 1500): dropped; at
    // 1,500 kcal it is read. 2 × 150 + 100 = 400 kcal at most.
    let (v, diags) = intake("date,kcal,protein_g\n2026-04-01,150,400\n2026-04-02,1500,400\n");
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(2));
    assert_eq!(v.len(), 1);
    assert_eq!((v[0].kcal, v[0].protein_g), (1500.0, Some(400.0)));
    // A small row rounded on its label (5 kcal, 1 g each: 17 kcal) is read.
    let (v, diags) = intake("date,kcal,carbs_g,fat_g,protein_g\n2026-04-01,5,1,1,1\n");
    assert!(diags.is_empty(), "{diags:#?}");
    assert_eq!(v[0].fat_g, Some(1.0));
}

/// A row dated after a withdrawal of consent is not read (`parse_rows`), so it cannot tell how
/// the file's other durations are written either. Before, the minutes:seconds evidence was
/// looked for in every row: a `45:00` synced on 10 July, after consent was withdrawn on
/// 5 June, made the `1:30` of 1 June read as 1.5 minutes, where without that row it is dropped
/// as ambiguous (the June report's activity and energy figures and weekly.csv changed).
#[test]
fn rows_after_withdrawn_consent_do_not_decide_how_durations_are_read() {
    let text = "date,activity,minutes,met,steps\n2026-05-30,walking_3mph,30,,\n2026-06-01,walking_3mph,1:30,,\n2026-07-10,walking_3mph,45:00,,\n";
    let w = Window {
        withdrew: Some(d(2026, 6, 5)),
        reported_from: Some(d(2026, 6, 1)),
        ..window()
    };
    let mut diags = Vec::new();
    let v = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &w,
        &mut diags,
    )
    .unwrap();
    let read: Vec<_> = v.iter().map(|a| (a.date, a.minutes)).collect();
    assert_eq!(read, [(d(2026, 5, 30), 30.0)], "{diags:#?}");
    assert!(
        diags
            .iter()
            .any(|e| e.line == Some(3) && e.message.contains("no duration of the file tells which")),
        "{diags:#?}"
    );
    assert!(
        !diags.iter().any(|e| e.to_string().contains("`45:00`")),
        "{:?}",
        diags.iter().map(|e| e.to_string()).collect::<Vec<_>>()
    );
    // Without the withdrawal the 10 July row is read and tells minutes:seconds.
    let mut diags = Vec::new();
    let v = parse_activity(
        text,
        &CsvOptions::default(),
        &ctx("activity.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    assert_eq!(v.len(), 3, "{diags:#?}");
    assert_eq!(v[1].minutes, 1.5);
}

/// A withdrawal of consent near the start, in a file of ISO and numeric dates: the numeric
/// dates before it (`05/04/2026`, 5 April or 4 May) tell no order and are warned about one by
/// one, as they would be had nothing been synced after it. `14/04/2026` is after the
/// withdrawal on 12 April in every reading: it was warned about as an unreadable date too, its
/// date quoted (in the log and data-quality.csv, every month), where every other row after the
/// withdrawal is left out unread with the one warning that rows after it are there.
#[test]
fn a_numeric_date_after_a_withdrawal_in_every_reading_is_not_read() {
    let text = "date,weight,unit\n2026-04-01,90.2,kg\n05/04/2026,90,kg\n07/04/2026,89.8,kg\n\
                2026-04-10,89.6,kg\n14/04/2026,89,kg\n2026-04-20,88.5,kg\n";
    let x = d(2026, 4, 12);
    let w = Window {
        withdrew: Some(x),
        ..window()
    };
    let c = ctx("weights.csv").with_consent_withdrawn(Some(x));
    let mut diags = Vec::new();
    let out = parse_weights(text, &CsvOptions::default(), &c, &w, &mut diags).expect("usable");
    let dates: Vec<_> = out.iter().map(|x| x.date).collect();
    assert_eq!(dates, [d(2026, 4, 1), d(2026, 4, 10)]);
    let said: Vec<_> = diags.iter().map(|x| (x.line, x.message.as_str())).collect();
    assert_eq!(
        said,
        [
            (
                Some(3),
                "a date that reads both day first (2026-04-05) and month first (2026-05-04), and no date of the file tells which; the row is dropped"
            ),
            (
                Some(4),
                "a date that reads both day first (2026-04-07) and month first (2026-07-04), and no date of the file tells which; the row is dropped"
            ),
            (
                Some(6),
                "rows dated after consent was withdrawn (2026-04-12) are not read: stop what adds them, remove them"
            ),
        ],
        "{diags:#?}"
    );
    assert!(
        diags.iter().all(|x| !x.to_string().contains("14/04")),
        "{diags:#?}"
    );
    // The rows after the withdrawal are not counted among the file's rows either.
    assert_eq!(c.rows_in_file(), 4);
}

/// eGFR was "unknown test; the row is dropped" under every name and code: kidney function
/// never reached a clinician. It is read by its usual names and LOINC codes, in mL/min/1.73 m²
/// only (`mL/min` alone may be a creatinine clearance, not normalised: unit not accepted).
#[test]
fn egfr_is_read_by_name_and_loinc_code_in_ml_min_per_1_73_m2() {
    let mut diags = Vec::new();
    let v = parse_labs(
        "date,test,value,unit\n2026-04-01,eGFR,59,mL/min/1.73m2\n2026-04-02,62238-1,44,mL/min/1.73 m²\n2026-04-03,98979-8,>90,mL/min/{1.73_m2}\n2026-04-04,Estimated GFR,28,mL/min/1.73m2\n2026-04-05,egfr,58,mL/min\n",
        &CsvOptions::default(),
        &ctx("labs.csv"),
        &window(),
        &mut diags,
    )
    .unwrap();
    let got: Vec<(LabTest, f64, Option<Censor>)> =
        v.iter().map(|l| (l.test, l.value, l.censored)).collect();
    assert_eq!(
        got,
        [
            (LabTest::Egfr, 59.0, None),
            (LabTest::Egfr, 44.0, None),
            (LabTest::Egfr, 90.0, Some(Censor::Above)),
            (LabTest::Egfr, 28.0, None),
        ]
    );
    assert_eq!(diags.len(), 1, "{diags:#?}");
    assert_eq!(diags[0].line, Some(6));
    assert!(
        diags[0].message.contains("unit not accepted for `egfr`"),
        "{diags:#?}"
    );
}

/// An empty required cell is named like any other dropped row: what was expected (the column as
/// the file heads it) and what was found. It had neither.
#[test]
fn an_empty_required_cell_says_what_was_expected_and_found() {
    let (v, diags) =
        intake("Date,Calories,carbs_g\n2026-04-01,,30\n2026-04-02,  ,30\n2026-04-03,500,60\n");
    assert_eq!(v.len(), 1, "{diags:#?}");
    let said: Vec<_> = diags
        .iter()
        .map(|d| {
            (
                d.line,
                d.column,
                d.message.as_str(),
                d.expected.as_deref(),
                d.found.as_deref(),
            )
        })
        .collect();
    let expected = Some("a value in `kcal` (the column headed `Calories`)");
    assert_eq!(
        said,
        [
            (
                Some(2),
                Some(2),
                "`kcal` is empty; the row is dropped",
                expected,
                Some("an empty cell")
            ),
            (
                Some(3),
                Some(2),
                "`kcal` is empty; the row is dropped",
                expected,
                Some("a cell of spaces only")
            ),
        ]
    );
}

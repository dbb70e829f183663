//! Numbers a reader sees, under extreme but valid inputs (attack18): each must be physiologically
//! possible, finite, in the right unit, with its interval around its point, and dated within the
//! program.

use crate::harness::ProgramTest;

/// Writes participant `id` of `dir` (a woman born 1966, 170 cm, enrolled 1 April 2026) with the
/// weigh-ins given (date, kg, source).
fn person(dir: &std::path::Path, id: &str, weights: &[(String, f64, &str)]) {
    let p = dir.join("participants").join(id);
    std::fs::create_dir_all(&p).unwrap();
    std::fs::write(
        p.join("profile.yaml"),
        format!(
            "id: {id}\nsex: female\nbirth_date: 1966-05-20\nheight: 170 cm\nenrolled: 2026-04-01\ngroups: {{ site: Kiln Row }}\n"
        ),
    )
    .unwrap();
    let mut csv = String::from("date,weight,unit,source\n");
    for (d, w, s) in weights {
        csv.push_str(&format!("{d},{w:.1},kg,{s}\n"));
    }
    std::fs::write(p.join("weights.csv"), csv).unwrap();
}

/// The rows of the weight chart's data table: (week ending, trend, band cell).
fn trend_rows(html: &str) -> Vec<(String, f64, String)> {
    let start = html
        .find("<th scope=\"col\">Week ending</th>")
        .expect("trend table");
    let body = &html[start..];
    let body = &body[..body.find("</tbody>").unwrap()];
    body.split("<tr><td>")
        .skip(1)
        .map(|row| {
            let cells: Vec<&str> = row
                .split("</td>")
                .map(|c| c.trim_start_matches("<td>"))
                .collect();
            (
                cells[0].to_string(),
                cells[1].parse().unwrap(),
                cells[2].to_string(),
            )
        })
        .collect()
}

/// The fixture program with CL-01, a woman weighed only at the clinic, every 28 days, about 100
/// kg, run from 1 April to 30 September 2026 (six whole months), HTML only.
fn clinic_only_run() -> ProgramTest {
    let t = ProgramTest::fixture("report-small");
    let start = chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap();
    let clinic: Vec<(String, f64, &str)> = (0..7)
        .map(|i| {
            let d = start + chrono::Duration::days(28 * i);
            let zigzag = if i % 2 == 1 { 0.3 } else { -0.3 };
            (d.to_string(), 100.0 - 1.4 * i as f64 + zigzag, "clinic")
        })
        .collect();
    person(&t.dir, "CL-01", &clinic);
    let out = t.run(&[
        "run",
        "{dir}",
        "--from",
        "2026-04-01",
        "--to",
        "2026-09-30",
        "--as-of",
        "2026-10-01",
        "--formats",
        "html",
    ]);
    assert!(out.code <= 1, "{out:?}");
    t
}

fn page(t: &ProgramTest, rel: &str) -> String {
    std::fs::read_to_string(t.dir.join("reports").join(rel)).expect(rel)
}

/// Between CL-01's first two weigh-ins the trend's 95 % band read "6.8–191.3 kg" in the report's
/// table (and was drawn so), and the first week's band of the sample's SG-017 had no width: the
/// smoother's first steps subtracted variances of 10⁹ kg² from a diffuse slope prior (1000 kg/d)
/// and kept only rounding. With the slope's prior at 1 kg/d every band is a real one, in the
/// report and in the tidy metrics; the report's guard against a band no body could span
/// (`shown_trend_band`) stays, and hides nothing here.
#[test]
fn a_trend_band_between_clinic_weigh_ins_a_month_apart_is_one_a_body_could_span() {
    let t = clinic_only_run();
    let html = page(&t, "participants/CL-01.html");
    let rows = trend_rows(&html);
    assert!(rows.len() >= 20, "{rows:?}");
    for (week, trend, band) in &rows {
        assert!((85.0..=101.0).contains(trend), "{week}: {trend}");
        let (l, u) = band
            .split_once('–')
            .unwrap_or_else(|| panic!("{week}: {band}"));
        let (l, u): (f64, f64) = (l.parse().unwrap(), u.parse().unwrap());
        assert!(l <= *trend && *trend <= u, "{week}: {trend} outside {band}");
        assert!(u - l >= 0.1, "{week}: {band} has no width");
        // Weigh-ins 0.3 kg either side of a steady fall, a month apart: within ±2 kg.
        assert!((u - l) / 2.0 <= 2.0, "{week}: {band} around {trend}");
    }
    assert!(!html.contains("the band is left out"));
    // The tidy metrics carry the same bands: none wider than 4 kg, none of no width.
    let weekly = page(&t, "metrics/weekly.csv");
    let widths: Vec<f64> = weekly
        .lines()
        .filter(|l| l.starts_with("CL-01,trend,weight_trend_weekly,"))
        .map(|l| {
            let f: Vec<f64> = l.split(',').skip(5).map(|x| x.parse().unwrap()).collect();
            f[2] - f[1]
        })
        .collect();
    assert!(widths.len() >= 20, "{widths:?}");
    assert!(widths.iter().all(|w| (0.1..=4.0).contains(w)), "{widths:?}");
    // A participant who weighs in often keeps the band on every row.
    let sg = page(&t, "participants/SG-007.html");
    assert!(trend_rows(&sg).iter().all(|r| r.2 != "–"));
}

/// `--from 2026-04-01 --to 2026-09-30` (six whole months): every page was titled "April 2026",
/// the habits read "Days with a weigh-in per week, April 2026", and the group report's month
/// over month row said "April 2026". A period is named as a month only when it is one.
#[test]
fn a_period_of_several_whole_months_is_not_named_as_its_first_month() {
    let t = clinic_only_run();
    for rel in [
        "participants/CL-01.html",
        "participants/SG-007.html",
        "group/program.html",
    ] {
        let html = page(&t, rel);
        assert!(html.contains("1 Apr 2026 – 30 Sep 2026"), "{rel}");
        assert!(!html.contains("April 2026"), "{rel} says April 2026");
    }
}

/// Every `D Mon YYYY` date a page prints.
fn dates_in(html: &str) -> Vec<chrono::NaiveDate> {
    let words: Vec<&str> = html
        .split(|c: char| !c.is_ascii_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect();
    words
        .windows(3)
        .filter_map(|w| {
            chrono::NaiveDate::parse_from_str(&format!("{} {} {}", w[0], w[1], w[2]), "%d %b %Y")
                .ok()
        })
        .collect()
}

/// Weeks are named by their Monday, so the program's first week (1 April 2026 is a Wednesday)
/// was "Week of 30 Mar 2026" in both weekly tables of every participant report, a date before
/// the program: now "1 Apr 2026", the week's first day in the participant's span. No page
/// prints a date before the program's start.
#[test]
fn no_week_is_named_by_a_day_before_the_program() {
    let t = clinic_only_run();
    let start = chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap();
    for rel in ["participants/CL-01.html", "participants/SG-007.html"] {
        let html = page(&t, rel);
        let dates = dates_in(&html);
        assert!(dates.len() > 40, "{rel}: {}", dates.len());
        assert!(
            dates.iter().all(|d| *d >= start),
            "{rel}: {:?}",
            dates.iter().filter(|d| **d < start).collect::<Vec<_>>()
        );
        // The energy table's week, and the habits table's, which gives its 5 days
        // (Wednesday to Sunday).
        assert_eq!(
            (
                html.matches("<tr><td>1 Apr 2026</td>").count(),
                html.matches("<tr><td>1 Apr 2026 (5 days)</td>").count()
            ),
            (1, 1),
            "{rel}: the first week of both weekly tables"
        );
    }
}

/// The sample program run over two days (1–2 April 2026): each participant's weekly rates were
/// their two days scaled to seven, so participants.csv read `adherence.weigh_ins_per_week` 3.5
/// (one weigh-in in two days) and the sponsor's group report gave medians of "7.0 days with a
/// weigh-in" and "190 activity minutes per week" from two days. Under 7 days there is no rate:
/// the tidy cell is empty (its descriptor says why), the group medians leave such people out
/// (n 0 here, a count the small-cell rules show), and the group report's methods say so.
/// Over a week (1–7 April) the rates are back.
#[test]
fn under_a_week_of_days_no_weekly_rate_reaches_the_tidy_metrics_or_the_group_medians() {
    // Each run its own copy: a second release into the same ledger is audited against the first.
    let run = |to: &str, out: &str| {
        let t = ProgramTest::sample();
        let o = t.run(&[
            "run",
            "{dir}",
            "--from",
            "2026-04-01",
            "--to",
            to,
            "--out",
            out,
            "--formats",
            "html",
        ]);
        assert!(o.code <= 4, "{o:?}");
        let metrics = t.dir.join(out).join("metrics");
        let mut r = csv::Reader::from_path(metrics.join("participants.csv")).unwrap();
        let header = r.headers().unwrap().clone();
        let rows: Vec<csv::StringRecord> = r.records().map(|x| x.unwrap()).collect();
        let group: serde_json::Value =
            serde_json::from_str(&std::fs::read_to_string(metrics.join("group.json")).unwrap())
                .unwrap();
        let package = std::fs::read_to_string(metrics.join("datapackage.json")).unwrap();
        let html = std::fs::read_to_string(t.dir.join(out).join("group/program.html")).unwrap();
        (header, rows, group, package, html)
    };
    let (header, rows, group, package, html) = run("2026-04-02", "two-days");
    assert!(rows.len() >= 30, "{}", rows.len());
    let rates = [
        "adherence.weigh_ins_per_week",
        "adherence.food_log_days_per_week",
        "adherence.activity_minutes_per_week",
    ];
    for name in rates {
        let i = header.iter().position(|h| h == name).expect(name);
        let filled: Vec<&str> = rows
            .iter()
            .map(|r| &r[i])
            .filter(|c| !c.is_empty())
            .collect();
        assert!(filled.is_empty(), "{name}: {filled:?}");
    }
    let adherence = &group["program"]["stats"]["adherence"];
    for key in [
        "weigh_ins_per_week",
        "food_log_days_per_week",
        "activity_minutes_per_week",
    ] {
        assert_eq!(adherence[key]["n"]["value"], 0, "{key}: {adherence}");
        assert!(
            adherence[key]["median"].get("value").is_none(),
            "{key}: {adherence}"
        );
    }
    assert!(
        package.contains(
            "days with a weigh-in per week, period (empty when the period covers fewer than 7 of the participant's days in the program: too few for a rate per week)"
        ),
        "participants.csv's field description"
    );
    assert!(
        package.contains("leave out anyone with fewer than 7 days in the period"),
        "group.json's description"
    );
    assert!(
        html.contains("Someone with fewer than 7 such days has no rate per week and is left out of the activity, weigh-in and food-log medians"),
        "the group report's methods"
    );
    // 1–7 April: the two people who joined on 3 and 4 April (5 and 4 days) have no rate, the
    // 39 who joined on 1 April have theirs. The weigh-in median's n (39 of 41) would give the
    // two left out by subtraction: the small-cell rules see it and show n only as a range
    // (each run is a fresh program: no earlier release in its ledger).
    let (header, rows, group, _, _) = run("2026-04-07", "one-week");
    let at = |name: &str| header.iter().position(|h| h == name).unwrap();
    let (i, e) = (at("adherence.weigh_ins_per_week"), at("enrolled"));
    let empty: Vec<&str> = rows
        .iter()
        .filter(|r| r[i].is_empty())
        .map(|r| &r[e])
        .collect();
    assert_eq!(empty, ["2026-04-03", "2026-04-04"]);
    let n = &group["program"]["stats"]["adherence"]["weigh_ins_per_week"]["n"];
    assert_eq!(n["suppressed"], true, "{n}");
    // The whole of April: everyone has 11 days or more, and a rate.
    let (header, rows, group, _, _) = run("2026-04-30", "april");
    let i = header
        .iter()
        .position(|h| h == "adherence.weigh_ins_per_week")
        .unwrap();
    assert!(rows.iter().all(|r| !r[i].is_empty()));
    let n = &group["program"]["stats"]["adherence"]["weigh_ins_per_week"]["n"]["value"];
    assert_eq!(n.as_u64(), Some(rows.len() as u64), "{n}");
}

/// Someone who left on a Saturday (weighed every day from Wednesday 1 April to Saturday 1
/// August 2026): the trend table's last row read "1 Aug 2026" under "Week ending", below weeks
/// ending on Sundays, for a week of six days (Monday 27 July to Saturday 1 August), and its first
/// "5 Apr 2026" for a week of five. A week the trend covers in part now gives its days, as the
/// habits table does ("(3 days)"), and the chart's description says what they mean; whole weeks
/// are unchanged.
#[test]
fn a_trend_week_cut_short_by_the_first_or_last_weigh_in_gives_its_days() {
    let t = ProgramTest::fixture("report-small");
    let start = chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap();
    let end = chrono::NaiveDate::from_ymd_opt(2026, 8, 1).unwrap();
    let daily: Vec<(String, f64, &str)> = (0..=(end - start).num_days())
        .map(|i| {
            let d = start + chrono::Duration::days(i);
            (d.to_string(), 90.0 - 0.02 * i as f64, "home")
        })
        .collect();
    person(&t.dir, "WD-01", &daily);
    let profile = t.dir.join("participants/WD-01/profile.yaml");
    let mut text = std::fs::read_to_string(&profile).unwrap();
    text.push_str("withdrew: 2026-08-01\n");
    std::fs::write(&profile, text).unwrap();
    let out = t.run(&[
        "run",
        "{dir}",
        "--period",
        "2026-08",
        "--as-of",
        "2026-09-01",
        "--formats",
        "html",
    ]);
    assert!(out.code <= 1, "{out:?}");
    let html = page(&t, "participants/WD-01.html");
    let weeks: Vec<String> = trend_rows(&html).into_iter().map(|r| r.0).collect();
    assert_eq!(
        weeks.first().map(String::as_str),
        Some("5 Apr 2026 (5 days)")
    );
    assert_eq!(
        weeks[weeks.len() - 2..],
        ["26 Jul 2026".to_string(), "1 Aug 2026 (6 days)".to_string()]
    );
    assert!(
        weeks[1..weeks.len() - 1].iter().all(|w| !w.contains('(')),
        "{weeks:?}"
    );
    assert!(
        html.contains(
            "In the table, a week the trend covers only in part (the first, from your first weigh-in; the last, to your last weigh-in) gives its number of days beside the day it ends."
        ),
        "the chart's description"
    );
}

//! Reference and behaviour tests of the `adherence` module.
//!
//! Checks against published guidance name their source beside the assertion; the rest check
//! this module's own documented rules (Monday weeks, partial-week scaling, withdrawal cut-off)
//! on small synthetic participants whose expected values are counted by hand in the comments.

use chrono::NaiveDate;
use cohortpress_metric_adherence::{AdherenceModule, moderate_equivalent_minutes, week_start};
use cohortpress_metric_api::units::{Length, Mass};
use cohortpress_metric_api::{
    ActivityEntry, Cell, FlagSeverity, IntakeDay, Intensity, MetricModule, ModuleContext,
    ModuleOutput, ParticipantData, Period, Profile, ProgramInfo, SessionRecord, Sex, Targets,
    UnitSystem, WeighIn,
};
use std::collections::BTreeMap;

fn d(s: &str) -> NaiveDate {
    s.parse().unwrap()
}

fn profile(enrolled: &str) -> Profile {
    Profile {
        id: "T-001".into(),
        name: None,
        sex: Some(Sex::Female),
        birth_date: None,
        age_years: 45.0,
        height: Length::from_cm(165.0),
        enrolled: d(enrolled),
        withdrew: None,
        withdrawal_reason: Default::default(),
        groups: BTreeMap::new(),
        body_fat_percent: None,
        targets: Targets::default(),
        flags: vec![],
    }
}

fn empty(enrolled: &str) -> ParticipantData {
    ParticipantData {
        profile: profile(enrolled),
        weights: vec![],
        intake: vec![],
        activity: vec![],
        sessions: vec![],
        labs: vec![],
    }
}

fn weigh(date: &str, kg: f64) -> WeighIn {
    WeighIn {
        date: d(date),
        time: None,
        weight: Mass::from_kg(kg),
        source: None,
    }
}

fn intake(date: &str, kcal: f64) -> IntakeDay {
    IntakeDay {
        date: d(date),
        kcal,
        carbs_g: None,
        fat_g: None,
        protein_g: None,
        free_sugars_g: None,
    }
}

fn act(date: &str, minutes: f64, met: f64) -> ActivityEntry {
    ActivityEntry {
        date: d(date),
        activity: "test".into(),
        minutes,
        met,
        met_source: "given in file".into(),
        steps: None,
    }
}

fn session(date: &str, attended: bool) -> SessionRecord {
    SessionRecord {
        date: d(date),
        session: "s".into(),
        attended,
    }
}

fn ctx(from: &str, to: &str) -> ModuleContext {
    let spec = AdherenceModule.spec();
    ModuleContext {
        program: ProgramInfo {
            id: "demo".into(),
            title: "Demo".into(),
            start: d("2027-03-01"),
            end: d("2027-08-31"),
            units: UnitSystem::Metric,
            targets: Targets::default(),
        },
        period: Period {
            from: d(from),
            to: d(to),
        },
        as_of: d(to),
        settings: spec.resolve_settings(&serde_json::Value::Null).unwrap(),
        earlier: BTreeMap::new(),
    }
}

fn run(c: &ModuleContext, data: &ParticipantData) -> ModuleOutput {
    AdherenceModule.compute(c, data).unwrap()
}

fn cell_text(c: &Cell) -> &str {
    match c {
        Cell::Text(s) => s,
        other => panic!("expected text, found {other:?}"),
    }
}

fn cell_num(c: &Cell) -> f64 {
    match c {
        Cell::Number(x) => *x,
        other => panic!("expected a number, found {other:?}"),
    }
}

/// Column index by name in the weekly table.
fn col(out: &ModuleOutput, name: &str) -> usize {
    let t = out.table("weekly").unwrap();
    t.columns.iter().position(|c| c.name == name).unwrap()
}

#[test]
fn intensity_bands_by_met() {
    // Physical Activity Guidelines for Americans, 2nd ed. (US DHHS 2018): light < 3.0,
    // moderate 3.0–5.9, vigorous >= 6.0 MET (from memory).
    assert_eq!(Intensity::of_met(2.9), Intensity::Light);
    assert_eq!(Intensity::of_met(3.0), Intensity::Moderate);
    assert_eq!(Intensity::of_met(5.9), Intensity::Moderate);
    assert_eq!(Intensity::of_met(6.0), Intensity::Vigorous);
    // One vigorous minute counts as two moderate minutes; light minutes do not count
    // (US DHHS 2018; WHO 2020 guidelines; from memory).
    assert_eq!(
        moderate_equivalent_minutes(&act("2027-03-01", 30.0, 2.5)),
        0.0
    );
    assert_eq!(
        moderate_equivalent_minutes(&act("2027-03-01", 30.0, 3.5)),
        30.0
    );
    assert_eq!(
        moderate_equivalent_minutes(&act("2027-03-01", 30.0, 7.0)),
        60.0
    );
}

#[test]
fn sixty_moderate_plus_forty_five_vigorous_meets_150() {
    // Physical Activity Guidelines for Americans, 2nd ed. (US DHHS 2018) and WHO 2020
    // guidelines on physical activity: >= 150 min/week moderate or an equivalent combination,
    // 1 vigorous minute = 2 moderate minutes; 60 moderate + 45 vigorous = 150 moderate-equivalent
    // minutes (from memory).
    // Walking 2.8–3.2 mph is 3.5 MET (Compendium 2011 code 17190); jogging, general 7.0 MET
    // (Compendium 2011 code 12020).
    let mut data = empty("2027-03-01");
    data.activity = vec![
        act("2027-03-02", 60.0, 3.5),
        act("2027-03-04", 45.0, 7.0),
        act("2027-03-05", 40.0, 2.0), // light: not counted
    ];
    let out = run(&ctx("2027-03-01", "2027-03-07"), &data);
    let t = out.table("weekly").unwrap();
    assert_eq!(t.rows.len(), 1);
    assert_eq!(cell_num(&t.rows[0][col(&out, "activity_minutes")]), 150.0);
    assert_eq!(
        cell_text(&t.rows[0][col(&out, "met_activity_target")]),
        "yes"
    );
    assert_eq!(out.scalar("activity_minutes_per_week"), Some(150.0));
    assert_eq!(
        out.scalar("weeks_meeting_activity_target_percent"),
        Some(100.0)
    );

    // One vigorous minute fewer falls short (148 < 150).
    data.activity[1].minutes = 44.0;
    let out = run(&ctx("2027-03-01", "2027-03-07"), &data);
    let t = out.table("weekly").unwrap();
    assert_eq!(cell_num(&t.rows[0][col(&out, "activity_minutes")]), 148.0);
    assert_eq!(
        cell_text(&t.rows[0][col(&out, "met_activity_target")]),
        "no"
    );
}

/// Enrolled Wednesday 2027-03-03, period 2027-03-01 .. Wednesday 2027-03-17: three Monday weeks,
/// 5 + 7 + 3 covered days.
fn three_week_participant() -> ParticipantData {
    let mut data = empty("2027-03-03");
    data.weights = vec![
        weigh("2027-03-03", 90.0),
        weigh("2027-03-03", 90.2), // same day: one weigh-in day
        weigh("2027-03-05", 89.8),
        weigh("2027-03-08", 89.9),
        weigh("2027-03-09", 89.6),
        weigh("2027-03-10", 89.5),
        weigh("2027-03-11", 89.4),
        weigh("2027-03-16", 89.0),
        weigh("2027-03-18", 88.9), // after period.to: ignored
    ];
    data.intake = [
        "2027-03-03",
        "2027-03-04",
        "2027-03-05",
        "2027-03-06",
        "2027-03-07",
    ]
    .iter()
    .map(|s| intake(s, 1700.0))
    .chain([intake("2027-03-15", 1650.0)])
    .collect();
    data.activity = vec![
        act("2027-03-04", 30.0, 3.5),
        act("2027-03-06", 40.0, 3.0),
        act("2027-03-09", 50.0, 3.5),
        act("2027-03-12", 20.0, 8.0),
        act("2027-03-15", 35.0, 4.3),
        act("2027-03-17", 30.0, 6.0),
    ];
    data.sessions = vec![
        session("2027-03-04", true),
        session("2027-03-11", false),
        session("2027-03-18", true), // after period.to: ignored
    ];
    data
}

#[test]
fn weekly_table_counts_and_partial_weeks() {
    let data = three_week_participant();
    let out = run(&ctx("2027-03-01", "2027-03-17"), &data);
    let t = out.table("weekly").unwrap();
    let rows: Vec<Vec<String>> = t
        .rows
        .iter()
        .map(|r| {
            r.iter()
                .map(|c| match c {
                    Cell::Text(s) => s.clone(),
                    Cell::Number(x) => format!("{x}"),
                    Cell::Empty => String::new(),
                })
                .collect()
        })
        .collect();
    let names: Vec<&str> = t.columns.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(
        names,
        [
            "week_start",
            "days_covered",
            "weigh_ins",
            "food_log_days",
            "activity_minutes",
            "sessions_offered",
            "sessions_attended",
            "met_weigh_in_target",
            "met_food_log_target",
            "met_activity_target"
        ]
    );
    // Week 1 (Mon 03-01, covered Wed–Sun = 5 d): weigh-in days 03-03, 03-05 = 2 vs 3×5/7 = 2.14
    // → no; food 5 vs 5×5/7 = 3.57 → yes; activity 30 + 40 = 70 vs 150×5/7 = 107.1 → no.
    // Week 2 (03-08, 7 d): weigh-ins 4 → yes; food 0 → no; activity 50 + 2×20 = 90 → no.
    // Week 3 (03-15, covered Mon–Wed = 3 d): weigh-ins 1 vs 1.29 → no; food 1 vs 2.14 → no;
    // activity 35 + 2×30 = 95 vs 64.3 → yes.
    assert_eq!(
        rows,
        vec![
            vec![
                "2027-03-01",
                "5",
                "2",
                "5",
                "70",
                "1",
                "1",
                "no",
                "yes",
                "no"
            ],
            vec![
                "2027-03-08",
                "7",
                "4",
                "0",
                "90",
                "1",
                "0",
                "yes",
                "no",
                "no"
            ],
            vec![
                "2027-03-15",
                "3",
                "1",
                "1",
                "95",
                "0",
                "0",
                "no",
                "no",
                "yes"
            ],
        ]
    );
    let s = out.series("weekly_activity_minutes").unwrap();
    assert_eq!(s.step, "weekly");
    let pts: Vec<(NaiveDate, f64)> = s.points.iter().map(|p| (p.date, p.value)).collect();
    assert_eq!(
        pts,
        vec![
            (d("2027-03-01"), 70.0),
            (d("2027-03-08"), 90.0),
            (d("2027-03-15"), 95.0)
        ]
    );
    let w: Vec<f64> = out
        .series("weekly_weigh_ins")
        .unwrap()
        .points
        .iter()
        .map(|p| p.value)
        .collect();
    assert_eq!(w, vec![2.0, 4.0, 1.0]);
    let f: Vec<f64> = out
        .series("weekly_food_log_days")
        .unwrap()
        .points
        .iter()
        .map(|p| p.value)
        .collect();
    assert_eq!(f, vec![5.0, 0.0, 1.0]);
}

#[test]
fn period_scalars_streaks_and_gaps() {
    let data = three_week_participant();
    let out = run(&ctx("2027-03-01", "2027-03-17"), &data);
    // Covered days of the period: 03-03 .. 03-17 = 15 d = 15/7 weeks.
    let weeks = 15.0 / 7.0;
    let close = |a: Option<f64>, b: f64| (a.unwrap() - b).abs() < 1e-12;
    assert!(close(out.scalar("weigh_ins_per_week"), 7.0 / weeks));
    assert!(close(out.scalar("food_log_days_per_week"), 6.0 / weeks));
    assert!(close(
        out.scalar("activity_minutes_per_week"),
        255.0 / weeks
    ));
    assert_eq!(out.scalar("sessions_offered"), Some(2.0));
    assert_eq!(out.scalar("sessions_attended"), Some(1.0));
    assert_eq!(out.scalar("attendance_percent"), Some(50.0));
    // Only the whole week of 03-08 (90 moderate-equivalent minutes: no) is judged; the weeks
    // of 03-01 (5 days, 70 minutes) and 03-15 (3 days, 95 minutes, "yes" against its target
    // scaled to 3 days) are partial. It read 1 in 3 (33 %) when they counted.
    assert_eq!(
        out.scalar("weeks_meeting_activity_target_percent"),
        Some(0.0)
    );
    // Weigh-in days 03-08 .. 03-11 are the longest run (4 days).
    assert_eq!(out.scalar("longest_weigh_in_streak_days"), Some(4.0));
    // Days with any record: every day 03-03..03-12, then 03-15..03-17, so the longest gap is
    // 03-13..03-14 = 2 days.
    assert_eq!(out.scalar("longest_gap_days"), Some(2.0));
    assert_eq!(out.scalar("days_since_last_record"), Some(0.0));
    assert!(out.flags.is_empty(), "{:?}", out.flags);

    // A later monthly period counts only its own days: 03-08 .. 03-17 = 10 covered days.
    let out = run(&ctx("2027-03-08", "2027-03-17"), &data);
    assert!(close(out.scalar("weigh_ins_per_week"), 5.0 * 0.7));
    assert_eq!(out.scalar("sessions_offered"), Some(1.0));
    assert_eq!(out.scalar("attendance_percent"), Some(0.0));
    // Weeks overlapping 03-08..03-17: the whole week of 03-08 (no); the 3 days of the week of
    // 03-15 ("yes" against its scaled target) are not judged as a week.
    assert_eq!(
        out.scalar("weeks_meeting_activity_target_percent"),
        Some(0.0)
    );
}

/// Someone followed for two days of the period (here they left on its 2nd) with one 45-minute
/// walk read "100 % of weeks meeting the activity target" in the tidy metrics: two days were
/// judged as a week, against the target scaled to two days (43 minutes). With no whole week
/// of the period there is too little data: the figure is empty, and the weekly table keeps its
/// row with the 2 days covered. A whole week of the same period is judged as before.
#[test]
fn a_period_of_two_days_is_too_little_for_weeks_meeting_the_activity_target() {
    let c = ctx("2027-03-01", "2027-03-31");
    let mut data = empty("2027-02-01");
    data.profile.withdrew = Some(NaiveDate::from_ymd_opt(2027, 3, 2).unwrap());
    data.weights = vec![weigh("2027-03-01", 80.0), weigh("2027-03-02", 79.9)];
    data.activity = vec![act("2027-02-20", 20.0, 3.5), act("2027-03-01", 45.0, 3.5)];
    let out = run(&c, &data);
    assert_eq!(out.scalar("weeks_meeting_activity_target_percent"), None);
    let t = out.table("weekly").unwrap();
    let last = t.rows.last().unwrap();
    assert_eq!(cell_num(&last[col(&out, "days_covered")]), 2.0);
    assert_eq!(cell_text(&last[col(&out, "met_activity_target")]), "yes");

    // Followed to the 8th: the week of 03-01 is whole (45 minutes: not met), so 0 %.
    data.profile.withdrew = Some(NaiveDate::from_ymd_opt(2027, 3, 8).unwrap());
    let out = run(&c, &data);
    assert_eq!(
        out.scalar("weeks_meeting_activity_target_percent"),
        Some(0.0)
    );
}

#[test]
fn attendance_is_missing_when_no_session_was_offered() {
    let mut data = empty("2027-03-01");
    data.weights = vec![weigh("2027-03-01", 80.0)];
    let out = run(&ctx("2027-03-01", "2027-03-14"), &data);
    assert_eq!(out.scalar("sessions_offered"), Some(0.0));
    assert_eq!(out.scalar("attendance_percent"), None);
}

#[test]
fn nothing_counts_after_withdrawal() {
    let mut data = three_week_participant();
    data.profile.withdrew = Some(d("2027-03-09"));
    let out = run(&ctx("2027-03-01", "2027-03-17"), &data);
    let t = out.table("weekly").unwrap();
    // The table stops at the week of the withdrawal; that week covers Mon–Tue only.
    assert_eq!(t.rows.len(), 2);
    assert_eq!(cell_num(&t.rows[1][col(&out, "days_covered")]), 2.0);
    assert_eq!(cell_num(&t.rows[1][col(&out, "weigh_ins")]), 2.0);
    assert_eq!(cell_num(&t.rows[1][col(&out, "activity_minutes")]), 50.0);
    assert_eq!(cell_num(&t.rows[1][col(&out, "sessions_offered")]), 0.0);
    // 03-03..03-09 = 7 covered days: 4 weigh-in days in one week.
    assert_eq!(out.scalar("weigh_ins_per_week"), Some(4.0));
    assert_eq!(out.scalar("days_since_last_record"), Some(0.0));
    // Long silence after withdrawal does not raise the gap flag.
    let out = run(&ctx("2027-03-01", "2027-04-30"), &data);
    assert!(out.flags.iter().all(|f| f.code != "gap"));
}

/// A week that begins before the period and ends in it is whole for someone enrolled before
/// it: it is judged with its days before the period, as its row of the weekly table shows 7
/// covered days. The descriptor, docs/METHODS.md and docs/GUIDE.md said a week "the period's
/// start" cut short was not judged; only the period's end, enrolment and leaving cut a week
/// short.
#[test]
fn a_week_across_the_periods_start_is_judged_whole_and_the_descriptor_says_so() {
    // April 2027 starts on a Thursday: the week of Monday 29 March has 4 days in the period.
    let c = ctx("2027-04-01", "2027-04-30");
    let mut data = empty("2027-03-01");
    data.weights = vec![weigh("2027-03-29", 80.0), weigh("2027-04-28", 79.0)];
    // 150 moderate minutes on the Monday before the period: that week meets the target.
    data.activity = vec![act("2027-03-29", 150.0, 3.5), act("2027-04-06", 30.0, 3.5)];
    let out = run(&c, &data);
    // Weeks of 29 Mar (met), 5, 12 and 19 Apr (not); 26 Apr has 5 days (period's end): 1 in 4.
    assert_eq!(
        out.scalar("weeks_meeting_activity_target_percent"),
        Some(25.0)
    );
    let spec = AdherenceModule.spec();
    let described = &spec
        .outputs
        .iter()
        .find(|o| o.name == "weeks_meeting_activity_target_percent")
        .unwrap()
        .description;
    assert!(!described.contains("period's start"), "{described}");
    assert!(described.contains("before the period"), "{described}");
}

/// For someone who left, participants.csv gave two "days since" figures a reader could not
/// reconcile (sample program, September 2026, SG-018, left 27 July: 67 days since the last
/// weigh-in, 1 since the last record, when a weigh-in is a record). They count to different
/// days on purpose: this one to the end of observation, the day they left (how long before
/// leaving they stopped recording, nothing after it counted), the trend's to the period's end.
/// The descriptor (datapackage.json takes it from here) says so, and names the other column.
#[test]
fn days_since_the_last_record_run_to_the_day_they_left_and_say_so() {
    let mut data = three_week_participant();
    data.profile.withdrew = Some(d("2027-03-12"));
    // Last record before leaving: the activity of 03-12 (the day they left): 0 days; the
    // weigh-in of 03-16 and the rest after it are not counted.
    let out = run(&ctx("2027-03-01", "2027-03-31"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(0.0));
    data.profile.withdrew = Some(d("2027-03-14"));
    let out = run(&ctx("2027-03-01", "2027-03-31"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(2.0));
    let spec = AdherenceModule.spec();
    let described = &spec
        .outputs
        .iter()
        .find(|o| o.name == "days_since_last_record")
        .unwrap()
        .description;
    for words in [
        "the period's end, or the day the participant left when that is earlier",
        "records after it not counted",
        "trend.days_since_last_weigh_in, which runs to the period's end",
    ] {
        assert!(described.contains(words), "{described}");
    }
}

#[test]
fn gap_flag_at_fourteen_days() {
    // Two weeks without any record: common practice threshold for a check-in.
    let mut data = empty("2027-03-01");
    data.weights = vec![weigh("2027-03-01", 80.0)];
    data.intake = vec![intake("2027-03-02", 1800.0)];
    // Last record 03-02; on 03-15 the current gap is 13 days: no flag.
    let out = run(&ctx("2027-03-01", "2027-03-15"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(13.0));
    assert!(out.flags.is_empty());
    // On 03-16 it is 14 days: a notice.
    let out = run(&ctx("2027-03-01", "2027-03-16"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(14.0));
    assert_eq!(out.scalar("longest_gap_days"), Some(14.0));
    assert_eq!(out.flags.len(), 1);
    assert_eq!(out.flags[0].code, "gap");
    assert_eq!(out.flags[0].severity, FlagSeverity::Notice);
    assert!(
        out.flags[0].message.contains("14 days"),
        "{}",
        out.flags[0].message
    );
}

/// The gap flag is relative to the person's own spacing of records: it waits for twice their
/// usual spacing (the median number of days between record days, from three record days on)
/// when that is longer than `gap_flag_days`. A monthly clinic weigher read "No weigh-in, food
/// log or activity has been recorded for 25 days … A short check-in … may help" every month,
/// although monthly visits are her plan (tryout24).
#[test]
fn the_gap_flag_waits_for_twice_a_persons_usual_spacing() {
    // Weighed at the clinic on 1 March, 29 March, 26 April and 24 May (every 28 days).
    let mut data = empty("2027-03-01");
    data.weights = ["2027-03-01", "2027-03-29", "2027-04-26", "2027-05-24"]
        .iter()
        .map(|x| weigh(x, 90.0))
        .collect();
    // 25 days after the last visit: her usual spacing, no flag.
    let out = run(&ctx("2027-06-01", "2027-06-18"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(25.0));
    assert!(out.flags.is_empty(), "{:?}", out.flags);
    // 55 days: short of twice 28, no flag; 56 days: a notice that says why it waited.
    let out = run(&ctx("2027-07-01", "2027-07-18"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(55.0));
    assert!(out.flags.is_empty(), "{:?}", out.flags);
    let out = run(&ctx("2027-07-01", "2027-07-19"), &data);
    assert_eq!(out.flags.len(), 1, "{:?}", out.flags);
    assert_eq!(out.flags[0].code, "gap");
    let message = &out.flags[0].message;
    assert!(message.contains("for 56 days"), "{message}");
    assert!(
        message.contains("at least twice the usual 28 days between your records"),
        "{message}"
    );

    // A daily weigher who stops: her usual spacing is a day, so the floor of 14 days decides,
    // and 25 days without a record still raise the flag, with the message as before.
    let mut data = empty("2027-03-01");
    data.weights = (0..60)
        .map(|i| {
            weigh(
                &(d("2027-03-01") + chrono::Duration::days(i)).to_string(),
                90.0,
            )
        })
        .collect();
    let out = run(&ctx("2027-05-01", "2027-05-24"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(25.0));
    assert_eq!(out.flags.len(), 1, "{:?}", out.flags);
    let message = &out.flags[0].message;
    assert!(message.contains("for 25 days"), "{message}");
    assert!(!message.contains("usual"), "{message}");

    // Two record days are one spacing, not yet a habit: the floor decides.
    let mut data = empty("2027-03-01");
    data.weights = vec![weigh("2027-03-01", 90.0), weigh("2027-03-29", 90.0)];
    let out = run(&ctx("2027-04-01", "2027-04-23"), &data);
    assert_eq!(out.scalar("days_since_last_record"), Some(25.0));
    assert_eq!(out.flags.len(), 1, "{:?}", out.flags);
}

#[test]
fn light_activity_counts_as_a_record_but_not_as_minutes() {
    let mut data = empty("2027-03-01");
    data.activity = vec![act("2027-03-10", 60.0, 2.0)];
    let out = run(&ctx("2027-03-01", "2027-03-14"), &data);
    assert_eq!(out.scalar("activity_minutes_per_week"), Some(0.0));
    assert_eq!(out.scalar("days_since_last_record"), Some(4.0));
    // Leading gap 03-01..03-09 = 9 days.
    assert_eq!(out.scalar("longest_gap_days"), Some(9.0));
}

#[test]
fn no_data_before_enrolment_and_no_weeks_when_enrolled_after_period() {
    let mut data = three_week_participant();
    data.profile.enrolled = d("2027-04-01");
    let out = run(&ctx("2027-03-01", "2027-03-17"), &data);
    assert!(out.table("weekly").unwrap().rows.is_empty());
    assert_eq!(out.scalar("weigh_ins_per_week"), None);
    assert_eq!(out.scalar("longest_gap_days"), None);
    assert!(out.flags.is_empty());
    assert_eq!(week_start(d("2027-04-01")), d("2027-03-29"));
}

#[test]
fn attendance_to_date_counts_every_session_since_enrolment() {
    // A period holding only the 03-11 session (missed): the period rate is 0 %, while the
    // program-to-date rate counts 03-04 (attended) and 03-11 (missed) = 50 %; the 03-18 session
    // lies after the period and does not count.
    let data = three_week_participant();
    let out = run(&ctx("2027-03-09", "2027-03-17"), &data);
    assert_eq!(out.scalar("sessions_offered"), Some(1.0));
    assert_eq!(out.scalar("attendance_percent"), Some(0.0));
    assert_eq!(out.scalar("sessions_offered_to_date"), Some(2.0));
    assert_eq!(out.scalar("sessions_attended_to_date"), Some(1.0));
    assert_eq!(out.scalar("attendance_to_date_percent"), Some(50.0));
}

/// No activity entry since enrolment: the activity figures are unknown, not zero. Counted as
/// 0 minutes, people who never logged activity made a group median of "0 minutes per week" in
/// the sponsor's report and 0 in the tidy metrics. One light entry (a logged stroll, 0
/// moderate-equivalent minutes) is a log: the figures are then 0 and the target not met.
#[test]
fn no_activity_log_gives_no_activity_figures_not_zero() {
    let c = ctx("2026-05-01", "2026-05-31");
    let mut data = empty("2026-04-01");
    data.weights = vec![weigh("2026-05-04", 80.0), weigh("2026-05-11", 79.5)];
    let out = run(&c, &data);
    assert_eq!(out.scalar("activity_minutes_per_week"), None);
    assert_eq!(out.scalar("weeks_meeting_activity_target_percent"), None);
    assert!(
        out.series("weekly_activity_minutes")
            .unwrap()
            .points
            .is_empty()
    );
    let t = out.table("weekly").unwrap();
    let (am, met) = (
        col(&out, "activity_minutes"),
        col(&out, "met_activity_target"),
    );
    assert!(!t.rows.is_empty());
    assert!(
        t.rows
            .iter()
            .all(|r| matches!(r[am], Cell::Empty) && matches!(r[met], Cell::Empty))
    );
    // The other figures are unchanged: two weigh-in days over the 31 days of May.
    let w = out.scalar("weigh_ins_per_week").unwrap();
    assert!((w - 2.0 * 7.0 / 31.0).abs() < 1e-12, "{w}");

    data.activity = vec![act("2026-04-20", 30.0, 2.5)];
    let out = run(&c, &data);
    assert_eq!(out.scalar("activity_minutes_per_week"), Some(0.0));
    assert_eq!(
        out.scalar("weeks_meeting_activity_target_percent"),
        Some(0.0)
    );
    assert_eq!(
        out.series("weekly_activity_minutes").unwrap().points.len(),
        t.rows.len()
    );
}

#[test]
fn under_seven_covered_days_there_is_no_rate_per_week_but_the_counts() {
    use cohortpress_metric_adherence::{PeriodCounts, period_counts};
    // Enrolled on Wednesday 03-10, the period ends on Thursday 03-11: 2 covered days, one
    // weigh-in, one food log, two 30-minute brisk walks. Scaled to 7 days that was 3.5 days
    // with a weigh-in and 210 minutes a week: a rate no week has tested.
    let mut data = empty("2027-03-10");
    data.weights = vec![weigh("2027-03-10", 80.0)];
    data.intake = vec![intake("2027-03-11", 1800.0)];
    data.activity = vec![act("2027-03-10", 30.0, 4.0), act("2027-03-11", 30.0, 4.0)];
    let out = run(&ctx("2027-03-01", "2027-03-11"), &data);
    assert_eq!(out.scalar("weigh_ins_per_week"), None);
    assert_eq!(out.scalar("food_log_days_per_week"), None);
    assert_eq!(out.scalar("activity_minutes_per_week"), None);
    assert_eq!(
        period_counts(&data, d("2027-03-01"), d("2027-03-11")),
        PeriodCounts {
            days: 2,
            weigh_in_days: 1,
            food_log_days: 1,
            activity_minutes: Some(60.0)
        }
    );
    // 6 days: still none. 7 days (to Tuesday 03-16): the rate, as before.
    let out = run(&ctx("2027-03-01", "2027-03-15"), &data);
    assert_eq!(out.scalar("weigh_ins_per_week"), None);
    let out = run(&ctx("2027-03-01", "2027-03-16"), &data);
    assert_eq!(out.scalar("weigh_ins_per_week"), Some(1.0));
    assert_eq!(out.scalar("food_log_days_per_week"), Some(1.0));
    assert_eq!(out.scalar("activity_minutes_per_week"), Some(60.0));
    // A short period of someone enrolled long before: 2 days of the period, no rate either.
    let mut early = data.clone();
    early.profile.enrolled = d("2027-03-01");
    let out = run(&ctx("2027-03-10", "2027-03-11"), &early);
    assert_eq!(out.scalar("weigh_ins_per_week"), None);
    assert_eq!(
        period_counts(&early, d("2027-03-10"), d("2027-03-11")).activity_minutes,
        Some(60.0)
    );
    // No activity logged at all: unknown, not 0 minutes.
    let mut none = data.clone();
    none.activity.clear();
    assert_eq!(
        period_counts(&none, d("2027-03-01"), d("2027-03-11")).activity_minutes,
        None
    );
}

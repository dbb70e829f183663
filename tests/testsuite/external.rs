//! External modules through the library API: the example module, fake modules that misbehave in
//! every way the runner must contain, and the golden test that pins the wire format.
//!
//! The fake modules live in `tests/fixtures/fake-plugins/`; `fake.py ID MODE [PARTICIPANT]`
//! misbehaves as MODE says, only for PARTICIPANT when one is given, so each test can show that a
//! failure stays with that module and that participant.

use chrono::NaiveDate;
use cohortpress::diag::{Diagnostic, Severity};
use cohortpress::modules::{ModuleFailure, ModuleResults, ModuleSet, build_module_set};
use cohortpress::program::{Program, ProgramDef};
use cohortpress_metric_api::units::{Length, Mass};
use cohortpress_metric_api::{
    ActivityEntry, IntakeDay, LabResult, LabTest, ParticipantData, Period, Profile, ProgramInfo,
    SessionRecord, Sex, Targets, WeighIn,
};
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use crate::harness::{fixture, repo_root};

/// The example module, as a command relative to the fixture program folder.
const EXAMPLE: &str = "../../../plugins/example-external/step_summary.py";
/// The fake module, likewise.
const FAKE: &str = "../fake-plugins/fake.py";

fn day(m: u32, d: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(2027, m, d).unwrap()
}

/// A program in the `external-program` fixture folder whose `modules:` section is `modules`.
/// Entry i is said to be on line 20 + i.
fn program(modules: &str) -> Program {
    program_in(&fixture("external-program"), modules)
}

fn program_in(root: &Path, modules: &str) -> Program {
    let text = format!(
        "format_version: 1\nprogram: {{id: ext-fixture, title: Fixture, start: 2027-03-01, \
         end: 2027-05-31}}\nmodules:\n{modules}"
    );
    let def: ProgramDef = serde_yaml::from_str(&text).expect("test program parses");
    let info = ProgramInfo {
        id: def.program.id.clone(),
        title: def.program.title.clone(),
        start: def.program.start,
        end: def.program.end,
        units: def.units,
        targets: def.targets.apply(&Targets::default()),
    };
    let module_lines = (0..def.modules.len()).map(|i| (i, 20 + i as u64)).collect();
    Program {
        root: root.to_path_buf(),
        def,
        info,
        module_lines,
        underweight_line: None,
        source: String::new(),
    }
}

/// One fake module entry.
fn fake(id: &str, mode: &str, only_for: Option<&str>, timeout: f64) -> String {
    let who = only_for.map(|p| format!(", {p}")).unwrap_or_default();
    format!(
        "  - id: {id}\n    command: [{FAKE}, {id}, {mode}{who}]\n    timeout_seconds: {timeout}\n"
    )
}

fn example_entry(with: &str) -> String {
    format!("  - id: steps\n    command: [{EXAMPLE}]\n{with}")
}

fn participant(id: &str, steps: &[(NaiveDate, f64)]) -> ParticipantData {
    ParticipantData {
        profile: Profile {
            id: id.into(),
            name: Some("Ines Varga-Holt".into()),
            sex: Some(Sex::Female),
            birth_date: Some(NaiveDate::from_ymd_opt(1981, 6, 12).unwrap()),
            age_years: 45.0,
            height: Length::from_cm(164.0),
            enrolled: day(3, 1),
            withdrew: None,
            withdrawal_reason: Default::default(),
            groups: BTreeMap::from([("site".to_string(), "East Yard".to_string())]),
            body_fat_percent: None,
            targets: Targets::default(),
            flags: vec![],
        },
        weights: vec![
            WeighIn {
                date: day(3, 1),
                time: None,
                weight: Mass::from_kg(84.2),
                source: None,
            },
            WeighIn {
                date: day(3, 8),
                time: Some("07:15".into()),
                weight: Mass::from_kg(83.6),
                source: Some("home-scale".into()),
            },
        ],
        intake: vec![],
        activity: steps
            .iter()
            .map(|&(date, s)| ActivityEntry {
                date,
                activity: "walking_3mph".into(),
                minutes: 30.0,
                met: 3.5,
                met_source: "Compendium 2011 code 17190".into(),
                steps: Some(s),
            })
            .collect(),
        sessions: vec![],
        labs: vec![],
    }
}

fn march() -> Period {
    Period {
        from: day(3, 1),
        to: day(3, 31),
    }
}

fn run(set: &ModuleSet, program: &Program, p: &ParticipantData) -> ModuleResults {
    set.run(&program.info, march(), day(3, 31), p)
}

fn build(p: &Program) -> (ModuleSet, Vec<Diagnostic>) {
    match build_module_set(p) {
        Ok(x) => x,
        Err(d) => panic!("module set refused: {}", render(&d)),
    }
}

fn build_err(p: &Program) -> Vec<Diagnostic> {
    match build_module_set(p) {
        Ok((set, _)) => panic!("module set accepted: {:?}", set.ids()),
        Err(d) => d
            .into_iter()
            .filter(|d| d.severity == Severity::Error)
            .collect(),
    }
}

fn render(d: &[Diagnostic]) -> String {
    d.iter()
        .map(|d| d.to_string())
        .collect::<Vec<_>>()
        .join("\n")
}

/// Steps of the example: five logged days in March (one day logged in two rows), one day in
/// February and one in April that must not count.
fn example_steps() -> Vec<(NaiveDate, f64)> {
    vec![
        (NaiveDate::from_ymd_opt(2027, 2, 27).unwrap(), 12000.0),
        (day(3, 1), 6200.0),
        (day(3, 2), 9100.0),
        (day(3, 3), 4800.0),
        (day(3, 9), 8300.0),
        (day(3, 9), 500.0),
        (day(3, 10), 7900.0),
        (day(4, 1), 15000.0),
    ]
}

#[test]
fn the_example_module_summarises_steps() {
    let p = program(&example_entry(""));
    let (set, warnings) = build(&p);
    assert!(warnings.is_empty(), "{}", render(&warnings));
    assert_eq!(set.ids(), ["steps"]);
    assert_eq!(
        set.settings("steps").unwrap(),
        &serde_json::json!({"step_goal": 7000})
    );

    let r = run(&set, &p, &participant("XP-01", &example_steps()));
    assert!(r.failures.is_empty(), "{:?}", r.failures);
    let out = r.output("steps").unwrap();
    // Daily totals 6200, 9100, 4800, 8800 (8300 + 500), 7900: sum 36800 over 5 days.
    assert_eq!(out.scalar("mean_daily_steps"), Some(7360.0));
    assert_eq!(out.scalar("step_days"), Some(5.0));
    // 9100, 8800 and 7900 reach 7000: 3 of 5 days.
    assert_eq!(out.scalar("days_at_goal_percent"), Some(60.0));
    let weekly = out.series("weekly_mean_steps").unwrap();
    assert_eq!(weekly.step, "weekly");
    let points: Vec<(NaiveDate, f64)> = weekly.points.iter().map(|p| (p.date, p.value)).collect();
    // 2027-03-01 is a Monday: (6200 + 9100 + 4800) / 3 and (8800 + 7900) / 2.
    assert_eq!(points, [(day(3, 1), 6700.0), (day(3, 8), 8350.0)]);
    assert!(out.flags.is_empty());
}

#[test]
fn the_example_module_takes_its_setting_and_reports_no_data_plainly() {
    let p = program(&example_entry("    with: {step_goal: 8000}\n"));
    let (set, _) = build(&p);
    let r = run(&set, &p, &participant("XP-01", &example_steps()));
    // Only 9100 and 8800 reach 8000: 2 of 5 days.
    assert_eq!(
        r.output("steps").unwrap().scalar("days_at_goal_percent"),
        Some(40.0)
    );

    let r = run(&set, &p, &participant("XP-02", &[]));
    let out = r.output("steps").unwrap();
    assert_eq!(out.scalar("mean_daily_steps"), None);
    assert_eq!(out.scalar("step_days"), Some(0.0));
    assert_eq!(out.flags.len(), 1);
    assert_eq!(out.flags[0].code, "insufficient_data");
}

#[test]
fn settings_of_an_external_module_are_checked_against_its_spec() {
    let p = program(&example_entry(
        "    with: {step_goal: 500, goal_colour: green}\n",
    ));
    let errs = build_err(&p);
    assert_eq!(errs.len(), 2, "{}", render(&errs));
    // Each names its setting.
    let mut fields: Vec<&str> = errs.iter().filter_map(|e| e.field.as_deref()).collect();
    fields.sort_unstable();
    assert_eq!(
        fields,
        ["modules[0].with.goal_colour", "modules[0].with.step_goal"]
    );
    assert!(errs.iter().all(|e| e.line == Some(20)));
    assert!(
        errs[0]
            .message
            .contains("unknown setting `goal_colour` for module `steps`")
    );
    assert!(
        errs[1]
            .message
            .contains("500 is outside 1000..=30000 steps/d"),
        "{}",
        errs[1]
    );
}

/// Builds [fake `bad` misbehaving as `mode` for XP-02 only, the example], runs both
/// participants, and checks the failure stays with `bad` and XP-02. Returns XP-02's message.
fn contained(mode: &str, timeout: f64) -> String {
    let p = program(&format!(
        "{}{}",
        fake("bad", mode, Some("XP-02"), timeout),
        example_entry("")
    ));
    let (set, _) = build(&p);
    let steps = example_steps();

    let one = run(&set, &p, &participant("XP-01", &steps));
    assert!(
        one.failures.is_empty(),
        "{mode}: XP-01 failed: {:?}",
        one.failures
    );
    assert_eq!(one.output("bad").unwrap().scalar("weigh_ins"), Some(2.0));

    let two = run(&set, &p, &participant("XP-02", &steps));
    assert_eq!(two.failures.len(), 1, "{mode}: {:?}", two.failures);
    let ModuleFailure { module, message } = &two.failures[0];
    assert_eq!(module, "bad");
    assert!(two.output("bad").is_none());
    // The module after the failing one still ran for the same participant.
    assert_eq!(
        two.output("steps").unwrap().scalar("mean_daily_steps"),
        Some(7360.0)
    );
    message.clone()
}

#[test]
fn a_non_zero_exit_is_contained_and_shows_the_last_error_line() {
    assert_eq!(
        contained("exit", 20.0),
        "external module: exited with status 3; its last error line: `fake: the disk is on fire`"
    );
}

#[test]
fn output_that_is_not_json_is_contained() {
    let m = contained("garbage", 20.0);
    assert!(
        m.starts_with("external module: line 2 of its output is not a protocol message"),
        "{m}"
    );
    assert!(m.ends_with("found: `this is not json`"), "{m}");
}

#[test]
fn an_error_answer_is_contained() {
    assert_eq!(
        contained("error", 20.0),
        "external module: reported an error: no data for this one"
    );
}

#[test]
fn a_wrong_message_type_is_contained() {
    assert_eq!(
        contained("wrongtype", 20.0),
        "external module: wrong message type: expected `result` or `error`, found `hello`"
    );
}

#[test]
fn a_wrong_major_version_while_computing_is_contained() {
    let m = contained("proto2compute", 20.0);
    assert!(
        m.contains("speaks protocol 2.0 but this cohortpress speaks 1.0"),
        "{m}"
    );
}

#[test]
fn runaway_output_is_cut_off_and_contained() {
    let m = contained("big", 20.0);
    assert_eq!(
        m,
        "external module: its output exceeded the limit of 16 MiB and it was stopped"
    );
}

/// Before: a table of 700,000 rows (12 MiB of output, under the 16 MiB limit) was accepted, and
/// every value was held until the tidy files were written: 1.9 GB for two participants, so a
/// module answering so for a whole cohort could exhaust memory and end the run for everyone.
#[test]
fn a_result_with_too_many_table_cells_is_refused_and_contained() {
    assert_eq!(
        contained("rows", 20.0),
        "external module: it answered, but its `result` failed validation: its tables and \
         series hold 100,002 values (cells and points) for one participant; at most 100,000 are \
         accepted"
    );
}

#[test]
fn a_module_past_its_timeout_is_stopped_and_contained() {
    let m = contained("sleep", 2.0);
    assert!(
        m.starts_with("external module: did not finish within 2 s and was stopped"),
        "{m}"
    );
    assert!(
        m.contains("raise `timeout_seconds` for module `bad`"),
        "{m}"
    );
}

#[test]
fn writing_to_stderr_does_not_fail_a_module() {
    let p = program(&fake("chatty", "stderr", None, 20.0));
    let (set, _) = build(&p);
    let r = run(&set, &p, &participant("XP-01", &[]));
    assert!(r.failures.is_empty(), "{:?}", r.failures);
    assert_eq!(r.output("chatty").unwrap().scalar("weigh_ins"), Some(2.0));
}

#[test]
fn a_module_gets_a_minimal_environment_no_name_and_only_what_it_requires() {
    // `steps` runs first but `peek` does not require it, so `peek` must not see its output.
    let p = program(&format!(
        "{}{}",
        example_entry(""),
        fake("peek", "env", None, 20.0)
    ));
    let (set, _) = build(&p);
    let r = run(&set, &p, &participant("XP-01", &example_steps()));
    let out = r.output("peek").unwrap();
    assert_eq!(out.scalar("has_name"), Some(0.0));
    assert_eq!(out.scalar("earlier_modules"), Some(0.0));
    // Of the host's environment only PATH, HOME and LANG get through. The module's own
    // launcher may add variables of its own (Python sets LC_CTYPE when it coerces a C locale,
    // PEP 538; a version manager's `python3` shim sets its own), so the test names variables
    // that the host has and must not pass on: cargo sets these for every test run.
    let names = out.text("env_names").unwrap();
    let names: Vec<&str> = names.split(',').collect();
    assert!(std::env::var_os("CARGO_MANIFEST_DIR").is_some());
    for leaked in ["CARGO_MANIFEST_DIR", "CARGO_PKG_NAME", "CARGO"] {
        assert!(
            !names.contains(&leaked),
            "{leaked} reached the module: {names:?}"
        );
    }
    assert!(names.contains(&"PATH"), "{names:?}");
}

#[test]
fn a_wrong_major_version_at_the_handshake_is_refused() {
    let errs = build_err(&program(&fake("newer", "proto2", None, 20.0)));
    assert_eq!(errs.len(), 1, "{}", render(&errs));
    assert_eq!(
        errs[0].message,
        "external module `newer` failed its handshake: speaks protocol 2.0 but this cohortpress \
         speaks 1.0; a different major version cannot be used: use a version of the module \
         written for protocol 1.x"
    );
    assert_eq!(errs[0].line, Some(20));
}

#[test]
fn a_newer_minor_version_only_warns() {
    let p = program(&fake("later", "proto19", None, 20.0));
    let (set, warnings) = build(&p);
    assert_eq!(warnings.len(), 1, "{}", render(&warnings));
    assert_eq!(warnings[0].severity, Severity::Warning);
    assert!(
        warnings[0]
            .message
            .contains("speaks protocol 1.9, this cohortpress 1.0")
    );
    let r = run(&set, &p, &participant("XP-01", &[]));
    assert!(r.failures.is_empty(), "{:?}", r.failures);
    assert_eq!(r.output("later").unwrap().scalar("weigh_ins"), Some(2.0));
}

#[test]
fn a_missing_module_is_an_error_with_the_fix_unless_optional() {
    let entry = "  - id: ghost\n    command: [plugins/ghost.py]\n";
    let errs = build_err(&program(&format!("{}{entry}", example_entry(""))));
    assert_eq!(errs.len(), 1, "{}", render(&errs));
    assert_eq!(
        errs[0].message,
        "external module `ghost`: program `plugins/ghost.py` was not found"
    );
    assert_eq!(errs[0].line, Some(21));
    assert!(
        errs[0]
            .found
            .as_deref()
            .unwrap()
            .ends_with("external-program/plugins/ghost.py")
    );
    assert!(
        errs[0]
            .hint
            .as_deref()
            .unwrap()
            .contains("set `optional: true` on module `ghost`")
    );

    let bare = "  - id: ghost\n    command: [cohortpress-no-such-module-xyz]\n";
    let errs = build_err(&program(bare));
    assert_eq!(
        errs[0].found.as_deref(),
        Some("no `cohortpress-no-such-module-xyz` on PATH")
    );

    let optional = format!("{}{entry}    optional: true\n", example_entry(""));
    let p = program(&optional);
    let (set, warnings) = build(&p);
    assert_eq!(set.ids(), ["steps"]);
    assert_eq!(warnings.len(), 1);
    assert!(
        warnings[0].message.contains("`ghost` is skipped"),
        "{}",
        warnings[0]
    );
    let r = run(&set, &p, &participant("XP-01", &example_steps()));
    assert!(r.failures.is_empty());
}

#[test]
fn a_module_answering_with_another_id_is_refused() {
    let p = program(&format!(
        "  - id: counts\n    command: [{FAKE}, tallies, ok]\n"
    ));
    let errs = build_err(&p);
    assert_eq!(
        errs[0].message,
        "external module `counts` answers with the id `tallies`"
    );
}

#[test]
fn a_module_that_fails_its_handshake_is_refused_with_its_reason() {
    // A script that is not executable cannot be started; the message says what to do.
    let tmp = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    std::fs::write(tmp.path().join("plain.py"), "print('hi')\n").unwrap();
    let errs = build_err(&program_in(
        tmp.path(),
        "  - id: plain\n    command: [./plain.py]\n",
    ));
    assert!(
        errs[0]
            .message
            .contains("permission denied; make it executable"),
        "{}",
        errs[0]
    );
}

#[test]
fn the_listing_shows_a_programs_external_modules() {
    let p = program(&example_entry(""));
    let text = cohortpress::modules::describe_modules(Some(&p));
    assert!(
        text.contains("External modules of program `ext-fixture`"),
        "{text}"
    );
    assert!(
        text.contains(&format!("\nsteps 0.1.0 (command: {EXAMPLE})\n")),
        "{text}"
    );
    assert!(
        text.contains("    step_goal: integer, default 7000 steps/d, from 1000 to 30000\n"),
        "{text}"
    );
    assert!(
        text.contains("    weekly_mean_steps (series, steps/d)\n"),
        "{text}"
    );
}

/// Before: `cohortpress modules PROGRAM` printed an external module's spec as it came, so a
/// description holding `ESC ]0;…BEL ESC [2J` set the terminal's title and cleared the screen.
/// Every other message on the terminal shows control characters escaped.
#[test]
fn a_modules_spec_reaches_the_terminal_escaped() {
    let p = program(&fake("esc", "escapes", None, 20.0));
    let text = cohortpress::modules::describe_modules(Some(&p));
    assert!(
        !text.contains('\u{1b}') && !text.contains('\u{7}') && !text.contains('\u{202e}'),
        "{text}"
    );
    let trap = r"\u{1b}]0;pwned\u{7}\u{1b}[2J\u{202e}";
    for line in [
        format!("\nesc 0.0.1{trap} (command: "),
        format!("\n  test module {trap} (escapes)\n"),
        format!("\n    label: text, default x{trap} u{trap}, one of: x{trap}, y\n"),
        format!("\n        a setting {trap}\n"),
        format!("\n    weigh_ins (scalar, kg{trap})\n        count {trap}\n"),
    ] {
        assert!(text.contains(&line), "{line:?} not in\n{text}");
    }
}

// ---------------------------------------------------------------------------------------------
// Golden test of the wire format.
//
// CAUTION: within protocol major version 1 only new optional fields may be added. If this test
// fails because a field was renamed or removed, that change breaks every external module in the
// field: it needs protocol 2.0 instead. If it fails because an optional field was added, review
// the new request by eye and rewrite the pinned files with COHORTPRESS_BLESS=1.
// ---------------------------------------------------------------------------------------------

/// A small participant touching every part of the data model.
fn golden_participant() -> ParticipantData {
    let mut p = participant("XP-01", &[(day(3, 1), 6200.0), (day(3, 2), 9100.0)]);
    p.intake = vec![IntakeDay {
        date: day(3, 1),
        kcal: 1850.0,
        carbs_g: Some(210.0),
        fat_g: Some(62.5),
        protein_g: Some(95.0),
        free_sugars_g: None,
    }];
    p.sessions = vec![SessionRecord {
        date: day(3, 4),
        session: "1".into(),
        attended: true,
    }];
    p.labs = vec![LabResult {
        date: day(3, 2),
        test: LabTest::FastingGlucose,
        value: 5.5,
        unit_as_written: "mg/dL".into(),
        value_as_written: 99.088,
        censored: None,
    }];
    p
}

/// Parses JSON lines into an array, with the host version replaced so releases do not break it.
fn messages(bytes: &[u8]) -> serde_json::Value {
    let text = std::str::from_utf8(bytes).expect("UTF-8");
    assert!(text.ends_with('\n'), "each message ends with a newline");
    let mut v: Vec<serde_json::Value> = text
        .lines()
        .map(|l| serde_json::from_str(l).expect("one JSON object per line"))
        .collect();
    for m in &mut v {
        if m["type"] == "hello" && m.get("host").is_some() {
            m["host"] = serde_json::json!("cohortpress [VERSION]");
        }
    }
    serde_json::Value::Array(v)
}

fn golden(name: &str, actual: &serde_json::Value) {
    let path = repo_root()
        .join("tests/fixtures/protocol-golden")
        .join(name);
    let pretty = serde_json::to_string_pretty(actual).unwrap() + "\n";
    if std::env::var_os("COHORTPRESS_BLESS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, &pretty).unwrap();
    }
    let pinned = std::fs::read_to_string(&path).unwrap_or_else(|e| {
        panic!(
            "{}: {e} (write it with COHORTPRESS_BLESS=1)",
            path.display()
        )
    });
    let pinned: serde_json::Value = serde_json::from_str(&pinned).unwrap();
    assert_eq!(
        &pinned, actual,
        "{name} differs from the pinned wire format; actual:\n{pretty}"
    );
}

#[test]
fn the_wire_format_is_pinned() {
    let tmp = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let req: PathBuf = tmp.path().join("request");
    let resp: PathBuf = tmp.path().join("response");
    let entry = format!(
        "  - id: steps\n    command: [../fake-plugins/capture.py, {}, {}, {EXAMPLE}]\n",
        req.display(),
        resp.display()
    );
    let p = program(&entry);
    let (set, _) = build(&p);
    let r = run(&set, &p, &golden_participant());
    assert!(r.failures.is_empty(), "{:?}", r.failures);

    let request = messages(&std::fs::read(&req).unwrap());
    let response = messages(&std::fs::read(&resp).unwrap());
    // The display name never leaves the host.
    assert_eq!(
        request[1]["participant"]["profile"]["name"],
        serde_json::Value::Null
    );
    golden("request.json", &request);
    golden("response.json", &response);
}

// ---------------------------------------------------------------------------------------------
// Through the real binary.
// ---------------------------------------------------------------------------------------------

use crate::harness::ProgramTest;

/// The `external-program` fixture, copied, with the example module in its `plugins/` folder
/// (the fixture's program.yaml names `plugins/step_summary.py`).
fn fixture_with_example() -> ProgramTest {
    let t = ProgramTest::fixture("external-program");
    std::fs::create_dir_all(t.dir.join("plugins")).unwrap();
    // fs::copy keeps the executable bit.
    std::fs::copy(
        repo_root().join("plugins/example-external/step_summary.py"),
        t.dir.join("plugins/step_summary.py"),
    )
    .unwrap();
    t
}

/// `reports/metrics/participants.csv` as (participant id → column → value).
fn participants_csv(t: &ProgramTest) -> BTreeMap<String, BTreeMap<String, String>> {
    let path = t.dir.join("reports/metrics/participants.csv");
    let mut reader = csv::Reader::from_path(&path).expect("participants.csv");
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    let mut rows = BTreeMap::new();
    for record in reader.records() {
        let record = record.unwrap();
        let row: BTreeMap<String, String> = header
            .iter()
            .cloned()
            .zip(record.iter().map(String::from))
            .collect();
        rows.insert(row["participant_id"].clone(), row);
    }
    rows
}

const MARCH: [&str; 8] = [
    "run",
    "{dir}",
    "--period",
    "2027-03",
    "--as-of",
    "2027-04-05",
    "--formats",
    "html",
];

/// An external module's own words — its `error` message, its last line on standard error — can
/// hold the machine's paths, user and host names (a Python traceback does). They reached the
/// participant's report ("Some figures could not be computed this month: …"), the tidy metrics
/// and the cache, together with cohortpress's random working folder. The outputs now keep only
/// cohortpress's description of what happened; the run log has the rest.
#[test]
fn an_external_modules_own_words_stay_in_the_run_log() {
    let t = fixture_with_example();
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    std::fs::write(
        &yaml,
        text.replace(
            "modules:\n",
            &format!(
                "modules:\n  - id: bad\n    command: [{}, bad, leak, XP-02]\n",
                repo_root()
                    .join("tests/fixtures/fake-plugins/fake.py")
                    .display()
            ),
        ),
    )
    .unwrap();
    let out = t.run(&MARCH);
    assert_eq!(
        out.code,
        cohortpress::exit_code::MODULE_FAILED,
        "{}",
        out.stderr
    );
    // The log keeps the details, with whom they concern.
    assert!(
        out.stderr
            .contains("XP-02: module bad failed: external module: reported an error: cannot open /home/ana.example/x.csv"),
        "{}",
        out.stderr
    );
    let host = std::fs::read_to_string("/proc/sys/kernel/hostname")
        .map(|h| h.trim().to_string())
        .unwrap_or_default();
    for entry in walkdir::WalkDir::new(t.dir.join("reports")) {
        let entry = entry.unwrap();
        if !entry.file_type().is_file() {
            continue;
        }
        let bytes = std::fs::read(entry.path()).unwrap();
        let text = String::from_utf8_lossy(&bytes);
        for leak in ["ana.example", "cohortpress-module-", "Traceback"] {
            assert!(!text.contains(leak), "{leak} in {}", entry.path().display());
        }
        if host.len() > 3 {
            assert!(
                !text.contains(&format!(" on {host} ")),
                "the host name in {}",
                entry.path().display()
            );
        }
    }
    let report = std::fs::read_to_string(t.dir.join("reports/participants/XP-02.html")).unwrap();
    assert!(
        report.contains("bad: external module: reported an error (the run log has the details)"),
        "{report}"
    );
    assert_eq!(participants_csv(&t)["XP-02"]["module_failures"], "bad");
    // Another participant's figures are untouched.
    assert_eq!(
        participants_csv(&t)["XP-01"]["steps.mean_daily_steps"],
        "7260"
    );
}

#[test]
fn binary_lists_the_external_module() {
    let t = fixture_with_example();
    let out = t.run(&["modules", "{dir}"]);
    assert_eq!(out.code, 0, "{}", out.stderr);
    assert!(
        out.stdout
            .contains("\nsteps 0.1.0 (command: plugins/step_summary.py)\n")
    );
    assert!(
        out.stdout
            .contains("    step_goal: integer, default 7000 steps/d")
    );
}

#[test]
fn binary_run_reports_the_example_modules_metrics() {
    let t = fixture_with_example();
    let out = t.run(&MARCH);
    assert_eq!(out.code, cohortpress::exit_code::SUCCESS, "{}", out.stderr);
    let rows = participants_csv(&t);
    // XP-01 (step_goal 8000 in the fixture): 6200, 9100, 4800, 8300, 7900 → mean 7260;
    // 9100 and 8300 reach 8000 → 40 %. XP-02: one day, 5100.
    assert_eq!(rows["XP-01"]["steps.mean_daily_steps"], "7260");
    assert_eq!(rows["XP-01"]["steps.step_days"], "5");
    assert_eq!(rows["XP-01"]["steps.days_at_goal_percent"], "40");
    assert_eq!(rows["XP-02"]["steps.mean_daily_steps"], "5100");
    assert_eq!(rows["XP-02"]["steps.days_at_goal_percent"], "0");
    // The external module's columns are described with what its handshake declared.
    let metrics = t.dir.join("reports/metrics");
    assert_eq!(
        crate::datapackage::check_package(&metrics),
        Vec::<String>::new()
    );
    let package: serde_json::Value =
        serde_json::from_slice(&std::fs::read(metrics.join("datapackage.json")).unwrap()).unwrap();
    let field = package["resources"][0]["schema"]["fields"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["name"] == "steps.mean_daily_steps")
        .expect("the module's column is described");
    assert_eq!(field["type"], "number");
    assert!(
        !field["description"].as_str().unwrap().contains("output `"),
        "{field}"
    );
}

#[test]
fn binary_run_contains_a_failing_module_to_its_participant() {
    let t = fixture_with_example();
    std::fs::copy(
        fixture("fake-plugins/fake.py"),
        t.dir.join("plugins/fake.py"),
    )
    .unwrap();
    std::fs::write(
        t.dir.join("program.yaml"),
        "format_version: 1\n\
         program: {id: ext-fixture, title: Fixture, start: 2027-03-01, end: 2027-05-31}\n\
         modules:\n  \
           - id: bad\n    command: [plugins/fake.py, bad, exit, XP-02]\n  \
           - id: steps\n    command: [plugins/step_summary.py]\n",
    )
    .unwrap();
    let out = t.run(&MARCH);
    assert_eq!(
        out.code,
        cohortpress::exit_code::MODULE_FAILED,
        "{}",
        out.stderr
    );
    assert!(
        out.stderr.contains(
            "XP-02: module bad failed: external module: exited with status 3; its last error \
             line: `fake: the disk is on fire`"
        ),
        "{}",
        out.stderr
    );
    // The module's own stderr line is logged, prefixed by its id.
    assert!(
        out.stderr.contains("bad: fake: the disk is on fire"),
        "{}",
        out.stderr
    );
    let rows = participants_csv(&t);
    assert_eq!(rows["XP-01"]["bad.weigh_ins"], "5");
    assert_eq!(rows["XP-01"]["module_failures"], "");
    assert_eq!(rows["XP-02"]["bad.weigh_ins"], "");
    assert_eq!(rows["XP-02"]["module_failures"], "bad");
    // The module after the failing one ran for XP-02 too.
    assert_eq!(rows["XP-02"]["steps.mean_daily_steps"], "5100");
}

// ---------------------------------------------------------------------------------------------
// Modules that leave processes behind. `fake.py ID MODE@PIDFILE` starts a `sleep 1000` child and
// an orphaned `sleep 1000` grandchild on every call, both holding its standard output open, and
// records their pids and its working folder in PIDFILE.
// ---------------------------------------------------------------------------------------------

/// One call of a lingering fake module, as recorded in its pid file.
#[derive(Debug)]
struct Lingered {
    /// The module's working folder and how many entries it held when the module started.
    cwd: PathBuf,
    entries: usize,
    /// The working folder's permission bits, in octal.
    mode: String,
    /// The module and every process it started.
    pids: Vec<u32>,
}

fn lingered(pid_file: &Path) -> Vec<Lingered> {
    let text = std::fs::read_to_string(pid_file).expect("the module wrote its pid file");
    let mut calls: Vec<Lingered> = Vec::new();
    for line in text.lines() {
        let mut parts = line.splitn(4, ' ');
        let pid: u32 = parts.next().unwrap().parse().unwrap();
        match parts.next().unwrap() {
            "-" => calls.last_mut().unwrap().pids.push(pid),
            cwd => calls.push(Lingered {
                cwd: PathBuf::from(cwd),
                entries: parts.next().unwrap().parse().unwrap(),
                mode: parts.next().unwrap().to_string(),
                pids: vec![pid],
            }),
        }
    }
    calls
}

/// Whether process `pid` is alive: it has an entry in /proc and is not a zombie (a killed
/// process its parent has not yet reaped).
#[cfg(target_os = "linux")]
fn alive(pid: u32) -> bool {
    match std::fs::read_to_string(format!("/proc/{pid}/stat")) {
        // The state follows the command name in parentheses.
        Ok(stat) => stat
            .rsplit_once(')')
            .and_then(|(_, rest)| rest.split_whitespace().next())
            .is_some_and(|state| state != "Z" && state != "X"),
        Err(_) => false,
    }
}

/// Asserts that none of `pids` is running. A process killed with SIGKILL is gone within
/// moments; the loop only bridges the time the kernel takes to tear it down.
#[cfg(target_os = "linux")]
fn assert_none_survive(pids: &[u32]) {
    let mut left: Vec<u32> = pids.to_vec();
    for _ in 0..250 {
        left.retain(|&p| alive(p));
        if left.is_empty() {
            return;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let shown: Vec<String> = left
        .iter()
        .map(|p| {
            let cmd = std::fs::read(format!("/proc/{p}/cmdline")).unwrap_or_default();
            format!("{p} ({})", String::from_utf8_lossy(&cmd).replace('\0', " "))
        })
        .collect();
    panic!("processes of the module survived the run: {shown:?}");
}

/// The fixture with the fake module as `bad` (`MODE@PIDFILE`, misbehaving for `only_for` if
/// given) and the example as `steps`. Returns the test and the pid file.
fn lingering_program(mode: &str, only_for: Option<&str>, timeout: f64) -> (ProgramTest, PathBuf) {
    let t = fixture_with_example();
    std::fs::copy(
        fixture("fake-plugins/fake.py"),
        t.dir.join("plugins/fake.py"),
    )
    .unwrap();
    let pid_file = t.dir.parent().unwrap().join("module-pids.txt");
    let who = only_for.map(|p| format!(", {p}")).unwrap_or_default();
    std::fs::write(
        t.dir.join("program.yaml"),
        format!(
            "format_version: 1\n\
             program: {{id: ext-fixture, title: Fixture, start: 2027-03-01, end: 2027-05-31}}\n\
             modules:\n  \
               - id: bad\n    command: [plugins/fake.py, bad, {mode}@{}{who}]\n    \
                 timeout_seconds: {timeout}\n  \
               - id: steps\n    command: [plugins/step_summary.py]\n",
            pid_file.display()
        ),
    )
    .unwrap();
    (t, pid_file)
}

#[cfg(target_os = "linux")]
#[test]
fn binary_uses_the_answer_of_a_module_that_leaves_processes_behind_and_stops_them() {
    // A timeout far longer than the test: were the answer awaited until every process holding
    // the pipe let go, the calls would time out and the values below would be missing.
    // `@@`: one of the processes leaves the module's process group, as a daemon would.
    let (t, pid_file) = lingering_program("ok@", None, 600.0);
    let out = t.run(&MARCH);
    assert_eq!(out.code, cohortpress::exit_code::SUCCESS, "{}", out.stderr);
    let rows = participants_csv(&t);
    assert_eq!(rows["XP-01"]["bad.weigh_ins"], "5");
    assert_eq!(rows["XP-02"]["bad.weigh_ins"], "4");
    assert_eq!(rows["XP-01"]["module_failures"], "");
    assert_eq!(rows["XP-02"]["module_failures"], "");

    let calls = lingered(&pid_file);
    // The handshake and one computation per participant.
    assert_eq!(calls.len(), 3, "{calls:?}");
    let pids: Vec<u32> = calls.iter().flat_map(|c| c.pids.iter().copied()).collect();
    assert_eq!(pids.len(), 12, "{calls:?}");
    assert_none_survive(&pids);

    // Each call ran in a fresh, empty working folder of its own, outside the program folder,
    // removed after the call.
    for c in &calls {
        assert_eq!(c.entries, 0, "{c:?}");
        assert_eq!(c.mode, "700", "{c:?}");
        assert!(!c.cwd.starts_with(&t.dir), "{c:?}");
        assert!(!c.cwd.exists(), "{c:?}");
    }
    let mut folders: Vec<&PathBuf> = calls.iter().map(|c| &c.cwd).collect();
    folders.sort();
    folders.dedup();
    assert_eq!(folders.len(), 3);
}

#[cfg(target_os = "linux")]
#[test]
fn binary_stops_a_hanging_module_with_everything_it_started() {
    let (t, pid_file) = lingering_program("sleep@", Some("XP-02"), 2.0);
    let out = t.run(&MARCH);
    assert_eq!(
        out.code,
        cohortpress::exit_code::MODULE_FAILED,
        "{}",
        out.stderr
    );
    assert!(
        out.stderr.contains(
            "XP-02: module bad failed: external module: did not finish within 2 s and was \
             stopped"
        ),
        "{}",
        out.stderr
    );
    let rows = participants_csv(&t);
    assert_eq!(rows["XP-01"]["bad.weigh_ins"], "5");
    assert_eq!(rows["XP-02"]["bad.weigh_ins"], "");
    assert_eq!(rows["XP-02"]["steps.mean_daily_steps"], "5100");

    let calls = lingered(&pid_file);
    assert_eq!(calls.len(), 3, "{calls:?}");
    let pids: Vec<u32> = calls.iter().flat_map(|c| c.pids.iter().copied()).collect();
    assert_none_survive(&pids);
}

#[test]
fn an_answer_that_fails_validation_says_so() {
    assert_eq!(
        contained("invalid", 20.0),
        "external module: it answered, but its `result` failed validation: table `pairs` row 2 \
         has 2 cells for 1 columns"
    );
}

#[cfg(target_os = "linux")]
#[test]
fn an_invalid_answer_with_processes_left_behind_is_a_validation_failure_not_a_timeout() {
    let tmp = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let pid_file = tmp.path().join("pids");
    let m = contained(&format!("invalid@{}", pid_file.display()), 600.0);
    assert!(
        m.starts_with("external module: it answered, but its `result` failed validation"),
        "{m}"
    );
    let pids: Vec<u32> = lingered(&pid_file)
        .iter()
        .flat_map(|c| c.pids.iter().copied())
        .collect();
    // The handshake and the two participants.
    assert_eq!(pids.len(), 9);
    assert_none_survive(&pids);
}

/// Every cell of every CSV file under `dir`, by file name.
fn csv_cells(dir: &Path) -> BTreeMap<String, Vec<String>> {
    let mut files = BTreeMap::new();
    for entry in std::fs::read_dir(dir).unwrap() {
        let path = entry.unwrap().path();
        if path.extension().is_some_and(|x| x == "csv") {
            let mut reader = csv::ReaderBuilder::new()
                .has_headers(false)
                .flexible(true)
                .from_path(&path)
                .unwrap();
            let cells = reader
                .records()
                .flat_map(|r| r.unwrap().iter().map(String::from).collect::<Vec<_>>())
                .collect();
            files.insert(
                path.file_name().unwrap().to_string_lossy().into_owned(),
                cells,
            );
        }
    }
    files
}

#[test]
fn binary_escapes_formula_like_text_in_every_csv_and_keeps_numbers() {
    let t = fixture_with_example();
    std::fs::copy(
        fixture("fake-plugins/fake.py"),
        t.dir.join("plugins/fake.py"),
    )
    .unwrap();
    std::fs::write(
        t.dir.join("program.yaml"),
        "format_version: 1\n\
         program: {id: ext-fixture, title: Fixture, start: 2027-03-01, end: 2027-05-31}\n\
         modules:\n  \
           - id: txt\n    command: [plugins/fake.py, txt, formula]\n",
    )
    .unwrap();
    let profile = t.dir.join("participants/XP-01/profile.yaml");
    let text = std::fs::read_to_string(&profile).unwrap().replace(
        "groups: { site: East Yard }",
        "groups: { site: '=HYPERLINK(\"http://x\",\"y\")' }",
    );
    std::fs::write(&profile, text).unwrap();
    // An extra column named like a formula (and like one of ours misspelt, so that it is
    // warned about, not only noted): named in the data-quality list.
    let weights = t.dir.join("participants/XP-02/weights.csv");
    let text: String = std::fs::read_to_string(&weights)
        .unwrap()
        .lines()
        .enumerate()
        .map(|(i, l)| format!("{l},{}\n", if i == 0 { "@sorce" } else { "" }))
        .collect();
    std::fs::write(&weights, text).unwrap();

    let out = t.run(&MARCH);
    assert!(
        out.code == cohortpress::exit_code::SUCCESS || out.code == cohortpress::exit_code::WARNINGS,
        "{}",
        out.stderr
    );
    let rows = participants_csv(&t);
    assert_eq!(
        rows["XP-01"]["group_site"],
        "'=HYPERLINK(\"http://x\",\"y\")"
    );
    assert_eq!(rows["XP-02"]["group_site"], "West Yard");
    assert_eq!(rows["XP-01"]["txt.note"], "'+cmd");
    assert_eq!(rows["XP-01"]["txt.change_kg"], "-3.2");

    let files = csv_cells(&t.dir.join("reports/metrics"));
    let has = |file: &str, cell: &str| files[file].iter().any(|c| c == cell);
    assert!(
        has("tables.csv", "'@SUM(A1:A2)"),
        "{:?}",
        files["tables.csv"]
    );
    assert!(has("tables.csv", "'-2+3"), "{:?}", files["tables.csv"]);
    assert!(has("tables.csv", "-3.2"), "{:?}", files["tables.csv"]);
    assert!(has("weekly.csv", "'@kg"), "{:?}", files["weekly.csv"]);
    assert!(has("weekly.csv", "-3.2"), "{:?}", files["weekly.csv"]);
    assert!(
        has("data-quality.csv", "'@sorce"),
        "{:?}",
        files["data-quality.csv"]
    );
    // No cell of any CSV begins like a formula, except plain numbers.
    assert_eq!(files.len(), 4, "{:?}", files.keys());
    for (file, cells) in &files {
        for c in cells {
            let number = c.parse::<f64>().is_ok_and(f64::is_finite);
            assert!(
                number || !c.starts_with(['=', '+', '-', '@', '\t', '\r']),
                "{file}: `{c}`"
            );
        }
    }
}

#[cfg(target_os = "linux")]
#[test]
fn binary_interrupted_by_sigterm_stops_the_running_modules() {
    use std::os::unix::process::ExitStatusExt;
    // XP-02's call hangs (30 s) well inside its timeout; the run is stopped while it does.
    let (t, pid_file) = lingering_program("sleep@", Some("XP-02"), 600.0);
    let args: Vec<String> = MARCH
        .iter()
        .map(|a| a.replace("{dir}", &t.dir.to_string_lossy()))
        .collect();
    let mut run = std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
        .args(&args)
        .current_dir(&t.dir)
        .env_clear()
        .env("PATH", std::env::var("PATH").unwrap_or_default())
        .env("HOME", t.dir.parent().unwrap())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    // Wait until the handshake and both computations have started (each records three pids).
    let mut calls = Vec::new();
    for _ in 0..3000 {
        calls = std::fs::read_to_string(&pid_file)
            .map(|_| lingered(&pid_file))
            .unwrap_or_default();
        if calls.len() == 3 && calls.iter().all(|c| c.pids.len() == 4) {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    assert_eq!(calls.len(), 3, "{calls:?}");
    let status = std::process::Command::new("kill")
        .args(["-TERM", &run.id().to_string()])
        .status()
        .unwrap();
    assert!(status.success());
    let ended = run.wait().unwrap();
    assert_eq!(ended.signal(), Some(15), "{ended:?}");
    let pids: Vec<u32> = calls.iter().flat_map(|c| c.pids.iter().copied()).collect();
    assert_none_survive(&pids);
    for c in &calls {
        assert!(!c.cwd.exists(), "{c:?}");
    }
}

/// The modules' fingerprint is written into manifest.json and shard.json: an external module
/// named by an absolute path (here the example module under the repository's absolute path, as
/// an administrator's `/home/NAME/…` would be) appears by its file name alone, and so does an
/// absolute path in an argument; a path relative to the program folder is shown as written.
#[test]
fn the_fingerprint_in_the_outputs_names_no_absolute_path() {
    let abs = repo_root().join("plugins/example-external/step_summary.py");
    let abs = abs.to_string_lossy();
    let p = program(&format!(
        "  - id: steps\n    command: [{abs}, --notes=/home/ana/notes.txt]\n"
    ));
    let fp = build(&p).0.settings_fingerprint();
    assert_eq!(
        fp.lines().next().unwrap(),
        "steps 0.1.0 [\"…/step_summary.py\",\"--notes=…/notes.txt\"] {\"step_goal\":7000}",
        "{fp}"
    );
    assert!(!fp.contains(&*repo_root().to_string_lossy()), "{fp}");
    assert!(!fp.contains("/home/ana"), "{fp}");
    // Relative commands (to the program folder) and bare names are shown as written.
    let p = program(&example_entry(""));
    let fp = build(&p).0.settings_fingerprint();
    assert!(fp.contains(&format!("[\"{EXAMPLE}\"]")), "{fp}");
}

/// A `TMPDIR` that cannot hold the modules' working folders (a folder that does not exist, as a
/// crontab or container environment copied from another machine gives; a file) made every
/// external module "fail its handshake" and blamed `program.yaml` (exit 3). It is the temporary
/// folder that is wrong: `check`, `run` and `modules` name it, exit 6 (a folder the run needs
/// cannot be used), and `check` still checks the participants. A working `TMPDIR` runs.
#[test]
fn an_unusable_tmpdir_is_named_and_not_blamed_on_program_yaml() {
    let t = fixture_with_example();
    let missing = t.dir.join("no-such-tmp");
    let file = t.dir.join("program.yaml");
    for bad in [&missing, &file] {
        let bad = bad.to_string_lossy();
        let env = [("TMPDIR", &*bad)];
        for args in [&MARCH[..], &["check", "{dir}", "--as-of", "2027-04-05"][..]] {
            let out = t.run_env(args, &env);
            assert_eq!(
                out.code,
                cohortpress::exit_code::OUTPUT_FAILED,
                "{args:?} TMPDIR={bad}: {}{}",
                out.stdout,
                out.stderr
            );
            let said = format!("{}{}", out.stdout, out.stderr);
            assert!(
                said.contains("the temporary folder named by TMPDIR cannot be used")
                    && said.contains(&format!("TMPDIR={bad}")),
                "{said}"
            );
            assert!(!said.contains("failed its handshake"), "{said}");
            assert!(!said.contains("error: program.yaml"), "{said}");
        }
        let out = t.run_env(&["modules", "{dir}"], &env);
        assert_eq!(
            out.code,
            cohortpress::exit_code::OUTPUT_FAILED,
            "{}",
            out.stderr
        );
        assert!(out.stderr.contains("TMPDIR"), "{}", out.stderr);
    }
    assert!(
        !t.dir.join("reports").exists(),
        "a refused run wrote nothing"
    );
    let tmp = t.dir.parent().unwrap().join("tmp");
    std::fs::create_dir(&tmp).unwrap();
    let out = t.run_env(&MARCH, &[("TMPDIR", &*tmp.to_string_lossy())]);
    assert!(out.code <= 1, "{}", out.stderr);
}

/// The example module dates a first week that starts before the period by the period's first
/// day (the protocol allows it): with a period from Wednesday 3 March 2027, weekly.csv had the
/// week of Monday 1 March as `2027-03-03`, while the built-in modules date it `2027-03-01`, so
/// a join on participant and week_start lost that week. weekly.csv dates it by its Monday.
#[test]
fn weekly_csv_dates_an_external_modules_first_week_by_its_monday() {
    let t = fixture_with_example();
    let out = t.run(&[
        "run",
        "{dir}",
        "--from",
        "2027-03-03",
        "--to",
        "2027-03-31",
        "--as-of",
        "2027-04-05",
        "--formats",
        "html",
    ]);
    assert!(out.code <= 1, "{}", out.stderr);
    let mut csv = csv::Reader::from_path(t.dir.join("reports/metrics/weekly.csv")).unwrap();
    let rows: Vec<(String, String)> = csv
        .records()
        .map(Result::unwrap)
        .filter(|r| &r[0] == "XP-01" && &r[2] == "weekly_mean_steps")
        .map(|r| (r[4].to_string(), r[5].to_string()))
        .collect();
    // 3 March alone (4800) in the first week; 8300 and 7900 in the week of 8 March.
    assert_eq!(
        rows,
        [
            ("2027-03-01".to_string(), "4800".to_string()),
            ("2027-03-08".to_string(), "8100".to_string())
        ]
    );
}

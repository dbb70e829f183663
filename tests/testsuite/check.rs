//! `cohortpress check` on a program whose participant folders each hold one kind of input
//! defect (`tests/fixtures/broken-program`).

use crate::harness::{ProgramTest, tree_hashes};

const AS_OF: &str = "2026-12-01";

/// (file:line[:column] as printed, words of the message) for each defect folder.
const DEFECTS: &[(&str, &str)] = &[
    ("participants/bad id:", "not a usable participant id"),
    (
        "participants/bad-height-unit/profile.yaml:4:",
        "the height has no unit",
    ),
    (
        "participants/before-enrolment/sessions.csv:2:1:",
        "before enrolment",
    ),
    (
        "participants/decimal-comma/weights.csv:3:2:",
        "decimal comma",
    ),
    (
        "participants/duplicate-rows/intake.csv:4:1:",
        "identical to line 3 in every column, time included",
    ),
    ("participants/future-date/weights.csv:3:1:", "in the future"),
    (
        "participants/impossible-weight/weights.csv:3:2:",
        "implausible weight",
    ),
    (
        "participants/lb-in-kg-row/weights.csv:4:2:",
        "looks like pounds",
    ),
    (
        "participants/missing-column/weights.csv:1:",
        "missing required column `unit`",
    ),
    (
        "participants/missing-profile/profile.yaml:",
        "has no profile.yaml",
    ),
    (
        "participants/non-utf8/activity.csv:3:15:",
        "not valid UTF-8",
    ),
    (
        "participants/unknown-activity/activity.csv:3:2:",
        "unknown activity `parkour drills` in 1 row",
    ),
    (
        "participants/wrong-field-count/weights.csv:3:4:",
        "row has 4 fields",
    ),
];

fn assert_report(text: &str) {
    for (location, words) in DEFECTS {
        assert!(
            text.lines()
                .any(|l| l.contains(location) && l.contains(words)),
            "no line with `{location}` and `{words}` in:\n{text}"
        );
    }
    // Clean participants are counted, not listed.
    for clean in ["bom-crlf", "clean-a", "clean-b"] {
        assert!(
            !text.contains(&format!("\n{clean}:")),
            "{clean} listed:\n{text}"
        );
    }
    assert!(
        text.contains("\n3 participants with nothing to report"),
        "{text}"
    );
    // A file that cannot be used costs that file, not the participant.
    for file_lost in ["missing-column", "non-utf8"] {
        assert!(
            text.contains(&format!("\n{file_lost}: usable (1 error)")),
            "{file_lost}:\n{text}"
        );
    }
    for unusable in ["bad-height-unit", "missing-profile"] {
        assert!(
            text.contains(&format!("\n{unusable}: not usable")),
            "{unusable}:\n{text}"
        );
    }
    assert!(
        text.contains("checked 16 participants: 13 usable, 3 not usable; 5 errors, 8 warnings"),
        "{text}"
    );
}

#[test]
fn check_names_every_defect_through_the_binary() {
    let t = ProgramTest::fixture("broken-program");
    let before = tree_hashes(&t.dir);
    let out = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(before, tree_hashes(&t.dir), "check modified its inputs");
    assert_eq!(
        out.code, 4,
        "exit code (PARTICIPANT_ERRORS)\nstdout:\n{}\nstderr:\n{}",
        out.stdout, out.stderr
    );
    assert_report(&out.stdout);
    insta::assert_snapshot!("broken_program_check", t.redact(&out.stdout));
}

#[test]
fn check_names_every_defect_through_the_library() {
    let t = ProgramTest::fixture("broken-program");
    let before = tree_hashes(&t.dir);
    let mut out = Vec::new();
    let as_of = chrono::NaiveDate::parse_from_str(AS_OF, "%Y-%m-%d").unwrap();
    let code = cohortpress::cmd::check::run_check(&t.dir, as_of, &mut out);
    assert_eq!(before, tree_hashes(&t.dir), "check modified its inputs");
    assert_eq!(code, cohortpress::exit_code::PARTICIPANT_ERRORS);
    let text = String::from_utf8(out).unwrap();
    assert_report(&text);
    // The same report as the binary prints (one snapshot for both).
    insta::assert_snapshot!("broken_program_check", t.redact(&text));

    // The clean participants' data arrive sorted and converted.
    let report = cohortpress::check::check_program(&t.dir, as_of);
    let b = report
        .participants
        .iter()
        .find(|p| p.id == "clean-b")
        .unwrap();
    let data = b.data.as_ref().unwrap();
    // 5 ft 11 in = 71 in × 2.54 = 180.34 cm; 231.5 lb × 0.45359237 = 105.0066 kg (exact factors).
    assert!((data.profile.height.cm() - 180.34).abs() < 1e-9);
    assert!((data.weights[0].weight.kg() - 105.006_633_655).abs() < 1e-6);
    assert_eq!(b.files.len(), 2);
}

/// `check` validates the program's modules exactly as `run` does (one shared function): a bad
/// module setting, or two modules that disagree on a setting they share, is exit 3 with the same
/// message from both, and `run` writes nothing.
#[test]
fn check_refuses_the_module_settings_run_refuses_with_the_same_message_and_code() {
    let cases = [
        (
            "  - id: energy\n    with: { intake_floor_female: 1400 }\n",
            "`intake_floor_female` differs between the `energy` module (1400) and the `outcomes` module (1200)",
        ),
        (
            "  - id: energy\n    with: { bogus_setting: 3 }\n",
            "bogus_setting",
        ),
    ];
    for (energy, words) in cases {
        let t = ProgramTest::sample();
        let file = t.dir.join("program.yaml");
        let text = std::fs::read_to_string(&file).unwrap();
        let edited: String = text
            .lines()
            .map(|l| {
                if l.starts_with("  - id: energy ") {
                    energy.to_string()
                } else {
                    format!("{l}\n")
                }
            })
            .collect();
        assert_ne!(edited, text);
        std::fs::write(&file, &edited).unwrap();

        let check = t.run(&["check", ".", "--as-of", AS_OF]);
        assert_eq!(check.code, 3, "check: {check:?}");
        let line = check
            .stdout
            .lines()
            .chain(check.stderr.lines())
            .find(|l| l.contains(words))
            .unwrap_or_else(|| panic!("check does not say `{words}`: {check:?}"));
        assert!(line.contains("program.yaml:"), "{line}");

        let out = t.dir.join("out");
        let run = t.run(&[
            "run",
            ".",
            "--as-of",
            AS_OF,
            "--out",
            &out.to_string_lossy(),
        ]);
        assert_eq!(run.code, 3, "run: {run:?}");
        assert!(
            run.stderr.contains(line.trim()),
            "run's message differs from check's `{line}`: {run:?}"
        );
        assert!(!out.exists());
    }
}

/// The underweight cut-off is one setting. Set in the `outcomes` module, it moves both the
/// clinician's `low_bmi` flag and the report's guidance (the cautions name it); set in
/// `guidance:` to another value, `check` and `run` refuse the program (exit 3) at that line.
#[test]
fn the_underweight_cut_off_is_one_setting() {
    let t = ProgramTest::sample();
    let file = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&file).unwrap();
    let with_outcomes: String = text
        .lines()
        .map(|l| {
            if l.starts_with("  - id: outcomes ") {
                "  - id: outcomes\n    with: { underweight_bmi_below: 19 }\n".to_string()
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    assert_ne!(with_outcomes, text);
    std::fs::write(&file, &with_outcomes).unwrap();
    let out = t.dir.join("out");
    let run = t.run(&[
        "run",
        ".",
        "--as-of",
        AS_OF,
        "--period",
        "2026-09",
        "--formats",
        "html",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert!(run.code <= 4, "{run:?}");
    let html = std::fs::read_to_string(out.join("participants/SG-001/report.html"))
        .or_else(|_| std::fs::read_to_string(out.join("participants/SG-001.html")))
        .expect("SG-001's report");
    assert!(
        html.contains("a BMI under 19 (or under 20 while still losing; 22 from age 70)"),
        "the guidance did not take the outcomes module's cut-off"
    );

    // 19 in `guidance:` beside the outcomes default of 18.5: refused by both commands.
    let lines = text.lines().count();
    std::fs::write(
        &file,
        format!("{text}guidance:\n  underweight_bmi_below: 19\n"),
    )
    .unwrap();
    let want = format!(
        "program.yaml:{}:26: `guidance.underweight_bmi_below` (19) differs from the `outcomes` module's `underweight_bmi_below` (18.5)",
        lines + 2
    );
    let check = t.run(&["check", ".", "--as-of", AS_OF]);
    assert_eq!(check.code, 3, "{check:?}");
    assert!(check.stdout.contains(&want), "{want} not in {check:?}");
    let out2 = t.dir.join("out2");
    let run = t.run(&[
        "run",
        ".",
        "--as-of",
        AS_OF,
        "--out",
        &out2.to_string_lossy(),
    ]);
    assert_eq!(run.code, 3, "{run:?}");
    assert!(run.stderr.contains(&want), "{want} not in {run:?}");
    assert!(!out2.exists());
}

/// A `group_by` key no profile gives (`sites` for the profiles' `site`) is a warning at
/// program.yaml's `report.group_by`, from `check` and from `run`, naming the keys the profiles
/// do give. Before, the group report silently put all 50 people in one section, "(not
/// recorded)".
#[test]
fn a_group_by_key_no_profile_gives_is_named_by_check_and_run() {
    let t = ProgramTest::sample();
    let file = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&file).unwrap();
    let warning = "no participant's profile.yaml gives group `sites`";
    let run = |t: &ProgramTest, out: &str| {
        let out = t.dir.join(out);
        t.run(&[
            "run",
            ".",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--out",
            &out.to_string_lossy(),
            "--state",
            &t.dir.join(".state").to_string_lossy(),
        ])
    };
    // As shipped (`group_by: [site]`): no such warning.
    let check = t.run(&["check", ".", "--as-of", AS_OF]);
    assert!(
        !check
            .stdout
            .contains("no participant's profile.yaml gives group")
    );

    let edited = text.replace("group_by: [site]", "group_by: [sites]");
    assert_ne!(edited, text);
    std::fs::write(&file, &edited).unwrap();
    let line = edited
        .lines()
        .position(|l| l.contains("group_by: [sites]"))
        .unwrap()
        + 1;
    let check = t.run(&["check", ".", "--as-of", AS_OF]);
    let at = format!("program.yaml:{line}:13: {warning}");
    assert!(check.stdout.contains(&at), "{at} not in {check:?}");
    assert!(
        check.stdout.contains(
            "expected: a key the profiles give under `groups:`: `site`, `team`; found: sites"
        ),
        "{check:?}"
    );
    let r = run(&t, "out");
    assert!(r.code <= 4, "{r:?}");
    assert!(r.stderr.contains(&at), "{r:?}");
}

/// A participant folder refused as a whole (a link to a folder elsewhere, a name that is no
/// id) is counted where it is listed: `check` said "checked 51 participants: 50 usable, 1 not
/// usable; 2 errors" beside the error for a linked `participants/SG-099`, while the run left
/// it out and counted it ("50 participants reported, 2 with errors"). Both now count it.
#[test]
fn a_refused_participant_folder_is_counted_by_check_as_by_run() {
    let t = ProgramTest::demo(3);
    let elsewhere = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let target = elsewhere.path().join("P-LINKED");
    std::fs::create_dir(&target).unwrap();
    let first = std::fs::read_dir(t.dir.join("participants"))
        .unwrap()
        .map(|e| e.unwrap().path())
        .min()
        .unwrap();
    for f in std::fs::read_dir(&first).unwrap() {
        let f = f.unwrap().path();
        std::fs::copy(&f, target.join(f.file_name().unwrap())).unwrap();
    }
    std::os::unix::fs::symlink(&target, t.dir.join("participants/SG-099")).unwrap();
    std::fs::create_dir(t.dir.join("participants/not an id")).unwrap();

    let check = t.run(&["check", ".", "--as-of", AS_OF]);
    assert_eq!(check.code, 4, "{check:?}");
    assert!(
        check
            .stdout
            .contains("checked 5 participants: 3 usable, 2 not usable; 2 errors"),
        "{}",
        check.stdout
    );
    let run = t.run(&[
        "run",
        ".",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        &t.dir.join("out").to_string_lossy(),
        "--state",
        &t.dir.join(".state").to_string_lossy(),
    ]);
    assert_eq!(run.code, 4, "{run:?}");
    assert!(
        run.stderr
            .contains("program steady-ground-2026: 5 participants (2 folders refused), period"),
        "{}",
        run.stderr
    );
    assert!(
        run.stderr.contains("done in")
            && run
                .stderr
                .contains(": 3 participants reported, 2 with errors,"),
        "{}",
        run.stderr
    );
}

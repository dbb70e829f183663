//! Hostile input through the real binary: names that try to inject HTML, ids and folders that
//! try to escape the output folder, YAML alias bombs and deep nesting, oversized files, and an
//! external module that hangs or looks for the host's environment. Then a bounded property
//! test over the CSV and YAML readers.

use crate::harness::{ProgramTest, fixture, tree_hashes};
use std::path::Path;
use std::process::Command;

const AS_OF: &str = "2026-12-01";
const BIN: &str = env!("CARGO_BIN_EXE_cohortpress");

/// A fresh generated demo program of `n` participants without planted defects.
fn demo(n: usize) -> ProgramTest {
    let scratch = tempfile::Builder::new()
        .prefix("cohortpress-demo-")
        .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
        .unwrap();
    let dir = scratch.path().join("p");
    let out = Command::new(BIN)
        .args(["demo-program", dir.to_str().unwrap(), "--no-defects"])
        .args(["--participants", &n.to_string()])
        .output()
        .unwrap();
    assert!(out.status.success(), "{out:?}");
    ProgramTest::from_dir(&dir)
}

fn out(t: &ProgramTest) -> String {
    t.dir
        .parent()
        .unwrap()
        .join("out")
        .to_string_lossy()
        .into_owned()
}

/// Replaces the `name:` line of a participant's profile.
fn set_profile_line(t: &ProgramTest, id: &str, key: &str, line: &str) {
    let p = t.dir.join(format!("participants/{id}/profile.yaml"));
    let text = std::fs::read_to_string(&p).unwrap();
    let new: Vec<String> = text
        .lines()
        .map(|l| {
            if l.starts_with(&format!("{key}:")) {
                line.to_string()
            } else {
                l.to_string()
            }
        })
        .collect();
    std::fs::write(&p, new.join("\n") + "\n").unwrap();
}

#[test]
fn names_cannot_inject_html_and_ids_cannot_escape_the_output_folder() {
    let t = demo(4);
    set_profile_line(&t, "SG-001", "name", "name: \"<script>alert(1)</script>\"");
    // A profile whose id tries to climb out of the output folder.
    set_profile_line(&t, "SG-002", "id", "id: ../x");
    // A folder whose name is not a plain id (dots, a space) and a link to a folder elsewhere.
    let sneaky = t.dir.join("participants/x..y z");
    std::fs::create_dir(&sneaky).unwrap();
    std::fs::copy(
        t.dir.join("participants/SG-003/profile.yaml"),
        sneaky.join("profile.yaml"),
    )
    .unwrap();
    std::os::unix::fs::symlink(
        t.dir.join("participants/SG-004"),
        t.dir.join("participants/SG-LINK"),
    )
    .unwrap();
    let inputs_before = tree_hashes(&t.dir);
    let o = out(&t);
    let r = t.run(&["run", "{dir}", "--as-of", AS_OF, "--out", &o]);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("not a usable participant id"),
        "{}",
        r.stderr
    );
    let quality = std::fs::read_to_string(Path::new(&o).join("metrics/data-quality.csv")).unwrap();
    assert!(
        quality.contains("participants/SG-LINK,,,,a link in the participants folder is skipped"),
        "{quality}"
    );

    // The name is shown as text, never as markup.
    let html = std::fs::read_to_string(Path::new(&o).join("participants/SG-001.html")).unwrap();
    assert!(
        html.contains("&lt;script&gt;alert(1)&lt;/script&gt;"),
        "name not escaped"
    );
    assert!(!html.contains("<script>alert(1)"), "markup injected");
    assert!(Path::new(&o).join("participants/SG-001.pdf").exists());
    // Group reports never carry names.
    let group = std::fs::read_to_string(Path::new(&o).join("group/program.html")).unwrap();
    assert!(!group.contains("alert(1)"));

    // Every output is a plain path inside the output folder; nothing was written elsewhere.
    for (path, _) in tree_hashes(Path::new(&o)) {
        assert!(
            path.split('/').all(|c| !c.is_empty()
                && c != ".."
                && c.chars()
                    .all(|ch| ch.is_ascii_alphanumeric() || "-_.".contains(ch))),
            "{path}"
        );
        assert!(
            !path.contains("SG-002") || path.contains("cache/"),
            "{path}"
        );
        assert!(!path.contains("LINK") && !path.contains("..y"), "{path}");
    }
    let parent: Vec<String> = std::fs::read_dir(t.dir.parent().unwrap())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    let mut parent = parent;
    parent.sort();
    assert_eq!(parent, [".out.lock", "out", "program"]);
    assert_eq!(
        tree_hashes(&t.dir),
        inputs_before,
        "inputs are never written"
    );
}

/// "Billion laughs": nine levels of nine-fold aliases (9^9 leaves once expanded), as a block
/// mapping indented by `indent` spaces.
fn alias_bomb(indent: usize) -> String {
    let pad = " ".repeat(indent);
    let lols = ["\"lol\""; 9].join(",");
    let mut text = format!("{pad}a: &a [{lols}]\n");
    let names = ["a", "b", "c", "d", "e", "f", "g", "h", "i"];
    for w in names.windows(2) {
        let refs = vec![format!("*{}", w[0]); 9].join(",");
        text.push_str(&format!("{pad}{n}: &{n} [{refs}]\n", n = w[1]));
    }
    text
}

/// `[[[…]]]`, `depth` levels.
fn deep(depth: usize) -> String {
    format!("{}{}", "[".repeat(depth), "]".repeat(depth))
}

/// Replaces a profile's `height:` line (a value the loader reads as free YAML) by `block`.
fn set_height(t: &ProgramTest, id: &str, block: &str) {
    let p = t.dir.join(format!("participants/{id}/profile.yaml"));
    let text = std::fs::read_to_string(&p).unwrap();
    let new: String = text
        .lines()
        .map(|l| {
            if l.starts_with("height:") {
                format!("height:{block}\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    std::fs::write(&p, new).unwrap();
}

#[test]
fn yaml_alias_bombs_and_deep_nesting_are_refused() {
    let t = demo(3);
    set_height(&t, "SG-001", &format!("\n{}", alias_bomb(2)));
    set_height(&t, "SG-002", &format!(" {}", deep(50_000)));
    let o = out(&t);
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--out",
        &o,
        "--formats",
        "html",
    ]);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("participants/SG-001/profile.yaml:")
            && r.stderr.contains("repetition limit exceeded"),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("participants/SG-002/profile.yaml:")
            && r.stderr.contains("recursion limit exceeded"),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("1 participants reported, 2 with errors"),
        "{}",
        r.stderr
    );

    // In program.yaml (a module's free-form `with:` settings) they stop the run before
    // anything is computed.
    let program = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    assert!(program.contains("  - id: trend"));
    let with_bomb = program.replacen(
        "  - id: trend",
        &format!("  - id: trend\n    with:\n{}", alias_bomb(6)),
        1,
    );
    std::fs::write(t.dir.join("program.yaml"), with_bomb).unwrap();
    let r = t.run(&["run", "{dir}", "--as-of", AS_OF, "--out", &o]);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PROGRAM_INVALID,
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("repetition limit exceeded"),
        "{}",
        r.stderr
    );
    let with_deep = program.replacen(
        "  - id: trend",
        &format!("  - id: trend\n    with: {}", deep(50_000)),
        1,
    );
    std::fs::write(t.dir.join("program.yaml"), with_deep).unwrap();
    let r = t.run(&["run", "{dir}", "--as-of", AS_OF, "--out", &o]);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PROGRAM_INVALID,
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("recursion limit exceeded"),
        "{}",
        r.stderr
    );
}

#[test]
fn oversized_files_are_refused_before_reading() {
    use cohortpress::limits::{MAX_CSV_BYTES, MAX_YAML_BYTES};
    let t = demo(3);
    // Sparse files: their size is over the limit without the test writing 64 MiB.
    let big_csv = std::fs::File::options()
        .append(true)
        .open(t.dir.join("participants/SG-001/weights.csv"))
        .unwrap();
    big_csv.set_len(MAX_CSV_BYTES + 1).unwrap();
    let big_yaml = std::fs::File::options()
        .append(true)
        .open(t.dir.join("participants/SG-002/profile.yaml"))
        .unwrap();
    big_yaml.set_len(MAX_YAML_BYTES + 1).unwrap();
    let o = out(&t);
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--out",
        &o,
        "--formats",
        "html",
    ]);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains(&format!(
            "participants/SG-001/weights.csv: cannot read the file (the file is 64.0 MiB ({} bytes), larger than the limit of 64 MiB",
            MAX_CSV_BYTES + 1
        )),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr
            .contains("participants/SG-002/profile.yaml: cannot read the file")
            && r.stderr.contains("larger than the limit of 1 MiB"),
        "{}",
        r.stderr
    );
    // The third participant is reported as usual.
    assert!(Path::new(&o).join("participants/SG-003.html").exists());

    let big_program = std::fs::File::options()
        .append(true)
        .open(t.dir.join("program.yaml"))
        .unwrap();
    big_program.set_len(MAX_YAML_BYTES + 1).unwrap();
    let r = t.run(&["run", "{dir}", "--as-of", AS_OF, "--out", &o]);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PROGRAM_INVALID,
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("program.yaml") && r.stderr.contains("larger than the limit of 1 MiB"),
        "{}",
        r.stderr
    );
}

/// The external-program fixture with the fake module as `peek` (environment report) and as
/// `slow` (hangs for XP-02).
#[test]
fn external_modules_get_a_minimal_environment_and_are_stopped_at_their_timeout() {
    let t = ProgramTest::fixture("external-program");
    std::fs::create_dir_all(t.dir.join("plugins")).unwrap();
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
           - id: peek\n    command: [plugins/fake.py, peek, env]\n  \
           - id: slow\n    command: [plugins/fake.py, slow, sleep, XP-02]\n    timeout_seconds: 2\n",
    )
    .unwrap();
    let o = t.dir.parent().unwrap().join("out");
    let r = Command::new(BIN)
        .args([
            "run",
            t.dir.to_str().unwrap(),
            "--period",
            "2027-03",
            "--as-of",
            "2027-04-05",
        ])
        .args(["--formats", "html", "--out", o.to_str().unwrap()])
        .env_clear()
        .env("PATH", std::env::var("PATH").unwrap_or_default())
        .env("HOME", t.dir.parent().unwrap())
        .env("COHORTPRESS_TEST_SECRET", "do-not-pass-on")
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&r.stderr);
    assert_eq!(
        r.status.code(),
        Some(cohortpress::exit_code::MODULE_FAILED),
        "{stderr}"
    );
    assert!(
        stderr.contains(
            "XP-02: module slow failed: external module: did not finish within 2 s and was stopped"
        ),
        "{stderr}"
    );
    let mut reader = csv::Reader::from_path(o.join("metrics/participants.csv")).unwrap();
    let header: Vec<String> = reader.headers().unwrap().iter().map(String::from).collect();
    let col = |name: &str| header.iter().position(|h| h == name).unwrap();
    let rows: Vec<csv::StringRecord> = reader.records().map(|r| r.unwrap()).collect();
    for row in &rows {
        let names: Vec<&str> = row[col("peek.env_names")].split(',').collect();
        assert!(!names.contains(&"COHORTPRESS_TEST_SECRET"), "{names:?}");
        assert!(names.contains(&"PATH"), "{names:?}");
        // The module never gets the participant's name.
        assert_eq!(&row[col("peek.has_name")], "0");
    }
    // XP-01 was not held up by XP-02's module: slow answered for XP-01.
    let xp01 = rows.iter().find(|r| &r[0] == "XP-01").unwrap();
    assert_eq!(&xp01[col("slow.weigh_ins")], "5");
}

mod readers {
    //! Property test: the CSV and YAML readers never panic on arbitrary input, and every
    //! diagnostic they give names its file, and every error a line. Bounded by a fixed number
    //! of cases so it runs in CI in bounded time.

    use cohortpress::diag::{Diagnostic, Severity};
    use cohortpress::participant::records::{self, Window};
    use cohortpress::participant::table::{CsvOptions, FileCtx};
    use proptest::prelude::*;

    /// Lines that look like the real files, mutated: numbers, dates, units, quotes, delimiters,
    /// control and non-ASCII characters.
    fn csv_text() -> impl Strategy<Value = String> {
        let header = prop::sample::select(vec![
            "date,weight,unit,source",
            "date,weight,unit",
            "date,kcal,protein_g,carbs_g,fat_g",
            "date,activity,minutes,intensity",
            "date,attended",
            "date,test,value,unit",
            "",
            "date;weight;unit",
        ]);
        let cell = prop_oneof![
            "[0-9]{1,4}(\\.[0-9]{1,3})?",
            "20[0-9]{2}-[01][0-9]-[0-3][0-9]",
            prop::sample::select(vec![
                "kg", "lb", "st", "yes", "no", "walking", "\"", "\"\"", ",", "-1", "1e308", "NaN",
                "inf", "ä", "\u{0}", "\r"
            ])
            .prop_map(String::from),
            "\\PC{0,8}",
        ];
        let row = prop::collection::vec(cell, 0..6).prop_map(|c| c.join(","));
        (header, prop::collection::vec(row, 0..12)).prop_map(|(h, rows)| {
            let mut s = h.to_string();
            for r in rows {
                s.push('\n');
                s.push_str(&r);
            }
            s
        })
    }

    fn check(diags: &[Diagnostic], file: &str) {
        for d in diags {
            assert_eq!(d.file, file, "{d}");
            if d.severity == Severity::Error && !d.message.contains("more than one document") {
                assert!(d.line.is_some(), "an error without a line: {d}");
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig { cases: 256, failure_persistence: None, ..ProptestConfig::default() })]

        #[test]
        fn csv_readers_never_panic_and_locate_every_error(text in csv_text()) {
            let opts = CsvOptions::default();
            let w = Window {
                enrolled: chrono::NaiveDate::from_ymd_opt(2026, 4, 1),
                withdrew: None,
                as_of: chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap(),
            };
            let file = "participants/P-1/x.csv";
            let ctx = FileCtx::new("P-1", file);
            let mut d = Vec::new();
            let _ = records::parse_weights(&text, &opts, &ctx, &w, &mut d);
            let _ = records::parse_intake(&text, &opts, &ctx, &w, &mut d);
            let _ = records::parse_activity(&text, &opts, &ctx, &w, &mut d);
            let _ = records::parse_sessions(&text, &opts, &ctx, &w, &mut d);
            let _ = records::parse_labs(&text, &opts, &ctx, &w, &mut d);
            check(&d, file);
        }

        #[test]
        fn yaml_reader_never_panics_and_locates_every_error(
            text in prop_oneof![
                "\\PC{0,200}",
                "(id: [A-Z0-9-]{0,8}\n|name: \"[^\"]{0,10}\"\n|height: [0-9]{1,3} (cm|in)\n|enrolled: 2026-0[1-9]-[0-3][0-9]\n|groups: \\{ site: [a-z]{0,5} \\}\n|  - \\*a\n|a: &a \\[1\\]\n|[\\[\\{\\]\\}:,&*!|>-]{1,6}\n){0,12}",
            ]
        ) {
            let file = "participants/P-1/profile.yaml";
            if let Err(d) = cohortpress::yaml::value_from_str(&text, file) {
                assert_eq!(d.file, file);
                // serde_yaml 0.9 gives no position for a second document (`---`); that one
                // error names the file and the fix only.
                if !d.message.contains("more than one document") {
                    assert!(d.line.is_some(), "a YAML error without a line: {d}");
                }
            }
            let ctx = FileCtx::new("P-1", file);
            let mut d = Vec::new();
            let _ = cohortpress::participant::profile::parse_profile(
                &text,
                "P-1",
                &Default::default(),
                &ctx,
                &mut d,
            );
            check(&d, file);
        }
    }
}

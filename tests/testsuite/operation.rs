//! Unattended operation through the real binary: exit codes, a run killed with SIGKILL, the run
//! lock, determinism (repeat runs, `--jobs`), cron-style JSON logs, `--incremental`, shards and
//! `merge`, and the owner-only file modes.
//!
//! Programs are small generated demo programs (`cohortpress demo-program`), so the whole module
//! stays fast in a debug build; only the kill and lock tests use a larger one, so that a run is
//! still going when it is interrupted.

use crate::harness::{Outcome, ProgramTest, tree_hashes};
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const AS_OF: &str = "2026-12-01";
const BIN: &str = env!("CARGO_BIN_EXE_cohortpress");

/// An output folder beside the program folder (outside it, so outputs never become inputs).
fn out(t: &ProgramTest, name: &str) -> String {
    t.dir
        .parent()
        .unwrap()
        .join(name)
        .to_string_lossy()
        .into_owned()
}

/// `run {dir} --as-of AS_OF --out OUT EXTRA…`.
fn run(t: &ProgramTest, out_dir: &str, extra: &[&str]) -> Outcome {
    let mut args = vec!["run", "{dir}", "--as-of", AS_OF, "--out", out_dir];
    args.extend_from_slice(extra);
    t.run(&args)
}

/// Starts `run` as a child process with no terminal and standard input closed (as cron does).
fn spawn_run(t: &ProgramTest, out_dir: &str, extra: &[&str]) -> Child {
    Command::new(BIN)
        .args([
            "run",
            t.dir.to_str().unwrap(),
            "--as-of",
            AS_OF,
            "--out",
            out_dir,
        ])
        .args(extra)
        .current_dir(&t.dir)
        .env_clear()
        .env("PATH", std::env::var("PATH").unwrap_or_default())
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap()
}

/// Files under `dir`, by relative path.
fn count_files(dir: &Path) -> usize {
    if !dir.exists() {
        return 0;
    }
    walkdir::WalkDir::new(dir)
        .into_iter()
        .filter_map(|e| e.ok())
        .filter(|e| e.file_type().is_file())
        .count()
}

/// Waits (polling) until `dir` holds at least `n` files; panics if `child` ends first.
fn wait_for_files(child: &mut Child, dir: &Path, n: usize) {
    let deadline = Instant::now() + Duration::from_secs(120);
    while count_files(dir) < n {
        if let Some(status) = child.try_wait().unwrap() {
            panic!(
                "the run ended ({status}) before {} held {n} files",
                dir.display()
            );
        }
        assert!(
            Instant::now() < deadline,
            "the run never filled its staging folder"
        );
        std::thread::sleep(Duration::from_millis(5));
    }
}

fn staging_of(out_dir: &str) -> PathBuf {
    let p = Path::new(out_dir);
    p.with_file_name(format!(
        ".{}.staging",
        p.file_name().unwrap().to_string_lossy()
    ))
}

fn assert_same_tree(a: &str, b: &str) {
    let (ha, hb) = (tree_hashes(Path::new(a)), tree_hashes(Path::new(b)));
    assert!(!ha.is_empty(), "{a} is empty");
    let names = |h: &[(String, String)]| h.iter().map(|(p, _)| p.clone()).collect::<Vec<_>>();
    assert_eq!(names(&ha), names(&hb), "{a} and {b} hold different files");
    for ((p, x), (_, y)) in ha.iter().zip(&hb) {
        assert_eq!(x, y, "{p} differs between {a} and {b}");
    }
}

#[test]
fn exit_codes_are_the_documented_ones() {
    let t = ProgramTest::demo(6);
    let ok = run(&t, &out(&t, "r"), &["--formats", "html"]);
    assert_eq!(ok.code, 0, "{}", ok.stderr);
    // A warning: a file in a participant folder that the loader does not read.
    std::fs::write(t.dir.join("participants/SG-001/notes.csv"), "x\n").unwrap();
    let warn = run(&t, &out(&t, "r"), &["--formats", "html"]);
    assert_eq!(warn.code, 1, "{}", warn.stderr);
    // An error in one participant: they are left out, the others reported.
    std::fs::remove_file(t.dir.join("participants/SG-002/profile.yaml")).unwrap();
    let errs = run(&t, &out(&t, "r"), &["--formats", "html"]);
    assert_eq!(errs.code, 4, "{}", errs.stderr);
    assert!(
        errs.stderr
            .contains("5 participants reported, 1 with errors"),
        "{}",
        errs.stderr
    );
    // Usage errors.
    assert_eq!(run(&t, &out(&t, "r"), &["--jobs", "0"]).code, 2);
    // A typo of a thread count: it started threads until memory ran out, then aborted (134).
    let many = run(&t, &out(&t, "r"), &["--jobs", "1000000"]);
    assert_eq!(many.code, 2, "{}", many.stderr);
    assert!(
        many.stderr
            .contains("--jobs must be at most 512 (one worker thread each), found 1000000"),
        "{}",
        many.stderr
    );
    assert_eq!(run(&t, &out(&t, "r"), &["--period", "2031-01"]).code, 2);
    assert_eq!(run(&t, &out(&t, "r"), &["--shard", "4/3"]).code, 2);
    // An invalid program: nothing computed, nothing written.
    std::fs::write(
        t.dir.join("program.yaml"),
        "format_version: 1\nprogram: [\n",
    )
    .unwrap();
    let bad = run(&t, &out(&t, "r2"), &[]);
    assert_eq!(bad.code, 3, "{}", bad.stderr);
    assert!(!Path::new(&out(&t, "r2")).exists());
    // --help lists every exit code.
    let help = t.run(&["--help"]);
    for (code, text) in cohortpress::exit_code::TABLE {
        assert!(
            help.stdout.contains(&format!("{code:>3}  {text}")),
            "{}",
            help.stdout
        );
    }
}

/// One test, one big run: a second run on the same output while it runs is refused with exit
/// code 7; killing it with SIGKILL mid-way leaves the previous complete output byte-identical
/// and nothing partial at the final path; the lock file it leaves does not block the next run.
#[test]
fn a_killed_run_leaves_the_previous_output_and_its_lock_blocks_nobody() {
    let t = ProgramTest::demo(200);
    let o = out(&t, "reports");
    // "Last month": a complete output from two participants.
    let first = run(&t, &o, &["--only", "SG-001", "SG-002"]);
    assert_eq!(first.code, 0, "{}", first.stderr);
    let before = tree_hashes(Path::new(&o));
    assert!(before.iter().any(|(p, _)| p == "manifest.json"));

    let mut big = spawn_run(&t, &o, &["--jobs", "2"]);
    let staging = staging_of(&o);
    wait_for_files(&mut big, &staging.join("participants"), 10);

    // The lock: a second run exits at once with its own code and says why.
    let second = run(&t, &o, &["--only", "SG-003"]);
    assert_eq!(second.code, 7, "{}", second.stderr);
    assert!(
        second
            .stderr
            .contains("another cohortpress run is writing to"),
        "{}",
        second.stderr
    );

    big.kill().unwrap(); // SIGKILL on Unix
    let status = big.wait().unwrap();
    assert!(!status.success());
    assert_eq!(
        tree_hashes(Path::new(&o)),
        before,
        "the previous output changed"
    );
    let lock = Path::new(&o).with_file_name(".reports.lock");
    assert!(lock.exists(), "the killed run's lock file is left behind");

    // The next run is not blocked by the stale lock file and replaces the leftovers.
    let next = run(&t, &o, &["--only", "SG-003", "--formats", "html"]);
    assert_eq!(next.code, 0, "{}", next.stderr);
    assert!(!staging.exists(), "staging is gone after a complete run");
    let names: Vec<String> = tree_hashes(Path::new(&o))
        .into_iter()
        .map(|(p, _)| p)
        .collect();
    assert!(
        names.contains(&"participants/SG-003.html".to_string()),
        "{names:?}"
    );
    assert!(!names.iter().any(|n| n.contains("SG-001")), "{names:?}");
}

/// A scheduler stopping a run (SIGTERM) left no line in the log: an administrator reading it
/// saw a run that started and never ended. It now says it was interrupted, and the previous
/// output is still the complete one. It also left its staging folder (`.reports.staging`, part
/// of the month's identified reports) beside the output until the next run into that folder or
/// beside it; it now removes it before it ends, and ends as SIGTERM ends a process (143 in a
/// shell), as docs/GUIDE.md says.
#[cfg(unix)]
#[test]
fn a_run_stopped_by_sigterm_says_so_in_its_log_and_leaves_no_staging_folder() {
    use std::io::Read as _;
    use std::os::unix::process::ExitStatusExt as _;
    let t = ProgramTest::demo(60);
    let o = out(&t, "reports");
    let first = run(&t, &o, &["--only", "SG-001", "--formats", "html"]);
    assert_eq!(first.code, 0, "{}", first.stderr);
    let before = tree_hashes(Path::new(&o));

    let mut big = spawn_run(&t, &o, &["--jobs", "1"]);
    wait_for_files(&mut big, &staging_of(&o).join("participants"), 4);
    let killed = Command::new("kill")
        .args(["-TERM", &big.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let status = big.wait().unwrap();
    assert_eq!(status.signal(), Some(15), "{status}");
    let mut stderr = String::new();
    big.stderr
        .take()
        .unwrap()
        .read_to_string(&mut stderr)
        .unwrap();
    let staging = staging_of(&o);
    let staging_shown = std::fs::canonicalize(t.dir.parent().unwrap())
        .unwrap()
        .join(".reports.staging");
    assert!(
        stderr.contains(&format!(
            "interrupted by SIGTERM: the run stops here; the unfinished output it was writing \
             ({}) was removed",
            staging_shown.display()
        )),
        "{stderr}"
    );
    assert!(
        !staging.exists(),
        "the staging folder is left: {:?}",
        std::fs::read_dir(&staging).map(|d| d.count())
    );
    assert_eq!(
        tree_hashes(Path::new(&o)),
        before,
        "the previous output changed"
    );
    // Nothing else of the run's beside the output: its lock file only.
    let mut beside: Vec<String> = std::fs::read_dir(t.dir.parent().unwrap())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .filter(|n| n.contains("reports"))
        .collect();
    beside.sort();
    assert_eq!(beside, [".reports.lock", "reports"], "{beside:?}");
}

#[test]
fn repeated_runs_and_any_job_count_give_identical_outputs() {
    let t = ProgramTest::demo(10);
    let (a, b, c) = (out(&t, "a"), out(&t, "b"), out(&t, "c"));
    assert_eq!(run(&t, &a, &["--jobs", "2"]).code, 0);
    assert_eq!(run(&t, &b, &["--jobs", "2"]).code, 0);
    assert_eq!(run(&t, &c, &["--jobs", "1"]).code, 0);
    assert_same_tree(&a, &b);
    assert_same_tree(&a, &c);
    // Reports in both formats, the tidy metrics, partial results and the manifest, which lists
    // every other output with its checksum and holds no clock time.
    let names: Vec<String> = tree_hashes(Path::new(&a))
        .into_iter()
        .map(|(p, _)| p)
        .collect();
    for n in [
        "group/program.html",
        "group/program.pdf",
        "participants/SG-001.pdf",
        "metrics/participants.csv",
        "cache/SG-001.json",
        "manifest.json",
    ] {
        assert!(names.contains(&n.to_string()), "{n} missing: {names:?}");
    }
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(Path::new(&a).join("manifest.json")).unwrap())
            .unwrap();
    let listed = manifest["outputs"].as_array().unwrap().len();
    assert_eq!(
        listed,
        names.len() - 1,
        "every output but the manifest is listed"
    );
    // The settings that made the outputs can be told from them: program.yaml's hash (targets,
    // guidance and privacy settings are not in the module list) and the templates'.
    let program_yaml = std::fs::read(t.dir.join("program.yaml")).unwrap();
    assert_eq!(
        manifest["program_yaml_blake3"].as_str(),
        Some(blake3::hash(&program_yaml).to_hex().as_str())
    );
    assert_eq!(manifest["templates_blake3"].as_str(), Some("built-in"));
    let pdf = std::fs::read(Path::new(&a).join("participants/SG-001.pdf")).unwrap();
    let text = String::from_utf8_lossy(&pdf);
    // The PDF's date is the period end, not the clock.
    assert!(
        text.contains("D:20260930"),
        "PDF creation date is the period end"
    );
}

#[test]
fn outputs_are_owner_only_unless_group_readable() {
    use std::os::unix::fs::PermissionsExt;
    let t = ProgramTest::demo(3);
    let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
    let o = out(&t, "private");
    assert_eq!(run(&t, &o, &["--formats", "html"]).code, 0);
    assert_eq!(mode(Path::new(&o)), 0o700);
    assert_eq!(mode(&Path::new(&o).join("participants")), 0o700);
    assert_eq!(mode(&Path::new(&o).join("participants/SG-001.html")), 0o600);
    assert_eq!(mode(&Path::new(&o).join("manifest.json")), 0o600);
    // The group-report ledger's folder too (it was 0755 from the umask): it holds the exact
    // counts behind every published figure.
    // (A new ledger beside the program's own, which records this program: meant here.)
    let st = t.dir.join("state-private");
    let o2 = out(&t, "private2");
    assert_eq!(
        run(
            &t,
            &o2,
            &[
                "--formats",
                "html",
                "--state",
                st.to_str().unwrap(),
                "--new-ledger"
            ]
        )
        .code,
        0
    );
    assert_eq!(mode(&st), 0o700);
    let g = out(&t, "shared");
    assert_eq!(
        run(&t, &g, &["--formats", "html", "--group-readable"]).code,
        0
    );
    assert_eq!(mode(Path::new(&g)), 0o750);
    assert_eq!(mode(&Path::new(&g).join("participants/SG-001.html")), 0o640);
    // Modes only: the content is the same.
    assert_same_tree(&o, &g);
}

/// `--group-readable` under `umask 077` (a hardened server's, or a crontab's): the modes given
/// at creation were cut by the umask, and the outputs came out 0700 and 0600, which the reports
/// group could not read (attack22). The modes are now set whatever the umask; owner-only stays
/// owner-only under `umask 000`.
#[test]
fn output_modes_do_not_depend_on_the_umask() {
    use std::os::unix::fs::PermissionsExt;
    let t = ProgramTest::demo(2);
    let mode = |p: &Path| std::fs::metadata(p).unwrap().permissions().mode() & 0o777;
    let under = |umask: &str, out_dir: &str, extra: &[&str]| {
        let status = Command::new("sh")
            .arg("-c")
            .arg(format!("umask {umask} && exec \"$0\" \"$@\""))
            .arg(BIN)
            .args([
                "run",
                t.dir.to_str().unwrap(),
                "--as-of",
                AS_OF,
                "--out",
                out_dir,
            ])
            .args(["--formats", "html"])
            .args(extra)
            .current_dir(&t.dir)
            .env_clear()
            .env("PATH", std::env::var("PATH").unwrap_or_default())
            .status()
            .unwrap();
        assert_eq!(status.code(), Some(0));
    };
    let g = out(&t, "shared");
    under("077", &g, &["--group-readable"]);
    assert_eq!(mode(Path::new(&g)), 0o750);
    assert_eq!(mode(&Path::new(&g).join("participants")), 0o750);
    assert_eq!(mode(&Path::new(&g).join("participants/SG-001.html")), 0o640);
    assert_eq!(mode(&Path::new(&g).join("manifest.json")), 0o640);
    let o = out(&t, "private");
    under("000", &o, &[]);
    assert_eq!(mode(Path::new(&o)), 0o700);
    assert_eq!(mode(&Path::new(&o).join("participants/SG-001.html")), 0o600);
}

#[test]
fn an_input_error_that_leaves_a_participant_out_is_logged_at_error_level() {
    // The sample leaves SG-049 out (no profile.yaml) and ends with exit code 4; its log line
    // was at WARN, so a collector alerting on ERROR lines never saw why.
    let t = ProgramTest::sample();
    let r = run(
        &t,
        &out(&t, "r"),
        &["--log-format", "json", "--formats", "html"],
    );
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    let left_out: Vec<serde_json::Value> = r
        .stderr
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap())
        .filter(|v| {
            v["fields"]["message"]
                .as_str()
                .is_some_and(|m| m.starts_with("participant left out: "))
        })
        .collect();
    assert!(!left_out.is_empty(), "{}", r.stderr);
    assert!(
        left_out.iter().all(|v| v["level"] == "ERROR"),
        "{left_out:?}"
    );
}

#[test]
fn a_cron_style_run_logs_json_lines_and_no_progress_bar() {
    let t = ProgramTest::demo(4);
    // `ProgramTest::run` gives the binary no terminal and a closed standard input.
    let r = run(
        &t,
        &out(&t, "r"),
        &["--log-format", "json", "--formats", "html"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    let lines: Vec<&str> = r.stderr.lines().collect();
    assert!(lines.len() >= 3, "{}", r.stderr);
    let mut messages = Vec::new();
    for l in &lines {
        let v: serde_json::Value =
            serde_json::from_str(l).unwrap_or_else(|e| panic!("not a JSON line ({e}): {l}"));
        assert!(v["level"].is_string(), "{l}");
        // Each line its UTC time, so a month's lines can be told from the next month's in a
        // log that cron appends to (it had none).
        let ts = v["timestamp"]
            .as_str()
            .unwrap_or_else(|| panic!("no timestamp: {l}"));
        assert!(
            ts.len() >= 20 && ts.as_bytes()[4] == b'-' && ts.contains('T') && ts.ends_with('Z'),
            "{l}"
        );
        messages.push(
            v["fields"]["message"]
                .as_str()
                .unwrap_or_default()
                .to_string(),
        );
        // The per-phase timing is a log record with numeric fields.
        if v["fields"]["message"] == "timing in seconds per phase" {
            assert!(v["fields"]["participants_s"].is_number(), "{l}");
        }
        // The last line carries the run's exit code (it had none).
        if v["fields"]["message"]
            .as_str()
            .is_some_and(|m| m.starts_with("done in"))
        {
            assert_eq!(v["fields"]["exit_code"], r.code, "{l}");
        }
    }
    assert!(
        messages.iter().any(|m| m.starts_with("done in")),
        "{messages:?}"
    );
    assert!(
        messages.iter().any(|m| m == "timing in seconds per phase"),
        "{messages:?}"
    );
    assert!(
        !r.stderr.contains('\u{1b}'),
        "no terminal escapes without a terminal"
    );
}

#[test]
fn a_cron_style_run_that_stops_logs_json_lines_ending_with_its_exit_code() {
    // A month whose run stops before it starts (a wrong period on the crontab line, a broken
    // program.yaml, an output folder that is not ours) wrote its reasons as plain text into the
    // JSON log, with no line carrying the exit code: a collector parsing the log's lines failed
    // on them, and one alerting on `exit_code` never saw the month.
    let t = ProgramTest::demo(3);
    let foreign = out(&t, "documents");
    std::fs::create_dir_all(&foreign).unwrap();
    std::fs::write(Path::new(&foreign).join("thesis.txt"), "mine").unwrap();
    let json = ["--log-format", "json", "--formats", "html"];
    let mut cases: Vec<(&str, Outcome)> = vec![
        ("a wrong period", {
            let mut a = json.to_vec();
            a.extend(["--period", "2026-13"]);
            run(&t, &out(&t, "r"), &a)
        }),
        ("a folder that is not ours", run(&t, &foreign, &json)),
    ];
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    std::fs::write(&yaml, text.replacen("title:", "titel:", 1)).unwrap();
    cases.push(("a broken program.yaml", run(&t, &out(&t, "r"), &json)));
    for (what, r) in &cases {
        assert!(
            [2, 3].contains(&r.code),
            "{what}: exit {}: {}",
            r.code,
            r.stderr
        );
        let lines: Vec<serde_json::Value> = r
            .stderr
            .lines()
            .map(|l| {
                serde_json::from_str(l)
                    .unwrap_or_else(|e| panic!("{what}: not a JSON line ({e}): {l}"))
            })
            .collect();
        let last = lines
            .last()
            .unwrap_or_else(|| panic!("{what}: nothing logged"));
        assert_eq!(last["fields"]["exit_code"], r.code, "{what}: {}", r.stderr);
        assert_eq!(last["level"], "ERROR", "{what}: {}", r.stderr);
        // The reason itself is in the log, at ERROR, before the last line.
        assert!(
            lines.len() >= 2 && lines.iter().all(|v| v["timestamp"].is_string()),
            "{what}: {}",
            r.stderr
        );
    }
    // The wording a person at a terminal reads is unchanged in text format.
    let r = run(&t, &out(&t, "r"), &["--formats", "html"]);
    assert_eq!(r.code, 3, "{}", r.stderr);
    assert!(r.stderr.starts_with("error: program.yaml:"), "{}", r.stderr);
}

/// A folder without a profile is not reported, and `--incremental` counted it as a participant
/// reused: "4 participants reused, 0 recomputed" above "3 participants reported".
#[test]
fn an_incremental_run_counts_the_participants_the_last_line_reports() {
    let t = ProgramTest::demo(3);
    let dir = t.dir.join("participants/SG-900");
    std::fs::create_dir(&dir).unwrap();
    std::fs::write(
        dir.join("weights.csv"),
        "date,weight,unit\n2026-04-01,80.0,kg\n",
    )
    .unwrap();
    let inc = out(&t, "inc");
    let first = run(&t, &inc, &[]);
    assert_eq!(first.code, 4, "{}", first.stderr);
    let again = run(&t, &inc, &["--incremental"]);
    assert_eq!(again.code, 4, "{}", again.stderr);
    assert!(
        again.stderr.contains(
            "incremental: 3 participants reused, 0 recomputed, not counting 1 folder not reported"
        ),
        "{}",
        again.stderr
    );
    assert!(
        again.stderr.contains("done in ")
            && again
                .stderr
                .contains(": 3 participants reported, 1 with errors"),
        "{}",
        again.stderr
    );
    // One participant's folder changes: it is the one recomputed.
    let w = t.dir.join("participants/SG-002/weights.csv");
    let text = std::fs::read_to_string(&w).unwrap();
    std::fs::write(&w, text + "\n").unwrap();
    let changed = run(&t, &inc, &["--incremental"]);
    assert!(
        changed.stderr.contains(
            "incremental: 2 participants reused, 1 recomputed, not counting 1 folder not reported"
        ),
        "{}",
        changed.stderr
    );
}

#[test]
fn an_incremental_run_recomputes_only_what_changed_and_equals_a_full_run() {
    let t = ProgramTest::demo(10);
    let inc = out(&t, "inc");
    assert_eq!(run(&t, &inc, &[]).code, 0);
    let before = tree_hashes(Path::new(&inc));

    // Nothing changed: everybody is reused and the output is identical.
    let same = run(&t, &inc, &["--incremental"]);
    assert_eq!(same.code, 0, "{}", same.stderr);
    assert!(
        same.stderr.contains("10 participants reused, 0 recomputed"),
        "{}",
        same.stderr
    );
    assert_eq!(tree_hashes(Path::new(&inc)), before);

    // One participant's last weigh-in changes.
    let w = t.dir.join("participants/SG-004/weights.csv");
    let text = std::fs::read_to_string(&w).unwrap();
    let mut lines: Vec<String> = text.lines().map(str::to_string).collect();
    let last = lines.last_mut().unwrap();
    let mut fields: Vec<String> = last.split(',').map(str::to_string).collect();
    let v: f64 = fields[1].parse().unwrap();
    fields[1] = format!("{:.1}", v - 1.5);
    *last = fields.join(",");
    std::fs::write(&w, lines.join("\n") + "\n").unwrap();

    let r = run(&t, &inc, &["--incremental"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stderr.contains("9 participants reused, 1 recomputed"),
        "{}",
        r.stderr
    );
    let full = out(&t, "full");
    assert_eq!(run(&t, &full, &[]).code, 0);
    assert_same_tree(&inc, &full);
    let after = tree_hashes(Path::new(&inc));
    let changed: Vec<&String> = after
        .iter()
        .zip(&before)
        .filter(|(a, b)| a.1 != b.1)
        .map(|(a, _)| &a.0)
        .collect();
    assert!(
        changed.contains(&&"participants/SG-004.pdf".to_string()),
        "{changed:?}"
    );
    assert!(!changed.iter().any(|p| p.contains("SG-005")), "{changed:?}");

    // A changed setting (another as-of date) recomputes everybody.
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--out",
        &inc,
        "--incremental",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stderr.contains("0 participants reused, 10 recomputed"),
        "{}",
        r.stderr
    );
}

/// Another build of the same version (its estimators may differ) shares no partial results:
/// the version number alone was the key, so an upgraded binary run with `--incremental` reused
/// the old build's figures. Another build is simulated by a copy of the binary with one byte
/// appended (trailing bytes do not change what an ELF executable runs).
#[test]
fn an_incremental_run_by_another_build_recomputes_everybody() {
    let t = ProgramTest::demo(3);
    let inc = out(&t, "inc");
    assert_eq!(run(&t, &inc, &[]).code, 0);
    let other = t.dir.parent().unwrap().join("cohortpress-other-build");
    let mut bytes = std::fs::read(BIN).unwrap();
    bytes.push(0);
    std::fs::write(&other, bytes).unwrap();
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&other, std::fs::Permissions::from_mode(0o755)).unwrap();
    }
    let r = Command::new(&other)
        .args([
            "run",
            t.dir.to_str().unwrap(),
            "--as-of",
            AS_OF,
            "--out",
            &inc,
        ])
        .arg("--incremental")
        .current_dir(&t.dir)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&r.stderr);
    assert_eq!(r.status.code(), Some(0), "{stderr}");
    assert!(
        stderr.contains("0 participants reused, 3 recomputed"),
        "{stderr}"
    );
    // The same build again reuses what it wrote.
    let same = run(&t, &inc, &["--incremental"]);
    assert!(
        same.stderr.contains("0 participants reused, 3 recomputed"),
        "{}",
        same.stderr
    );
    let again = run(&t, &inc, &["--incremental"]);
    assert!(
        again.stderr.contains("3 participants reused, 0 recomputed"),
        "{}",
        again.stderr
    );
}

/// A partial result written before a failed external module's own words were kept out of the
/// outputs (format 1) could hold them (a traceback with the user's home folder); reused by
/// `--incremental`, they were copied into metrics/participants.json. A record of that format is
/// recomputed.
#[test]
fn an_incremental_run_recomputes_a_record_of_the_older_format() {
    let t = ProgramTest::demo(3);
    let inc = out(&t, "inc");
    assert_eq!(run(&t, &inc, &[]).code, 0);
    let cache = Path::new(&inc).join("cache/SG-002.json");
    let mut rec: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&cache).unwrap()).unwrap();
    // As the older version wrote it: format 1, the module's whole message.
    rec["format"] = 1.into();
    let failures = serde_json::json!([[
        "ext-score",
        "external module: reported an error: Traceback (most recent call last): File \"/home/ana/ana.example/score.py\""
    ]]);
    rec["failures"] = failures.clone();
    rec["tidy"]["failures"] = failures;
    std::fs::write(&cache, serde_json::to_vec_pretty(&rec).unwrap()).unwrap();
    let r = run(&t, &inc, &["--incremental"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let metrics =
        std::fs::read_to_string(Path::new(&inc).join("metrics/participants.json")).unwrap();
    assert!(!metrics.contains("ana.example"), "{metrics}");
    assert!(
        r.stderr.contains("2 participants reused, 1 recomputed"),
        "{}",
        r.stderr
    );
    let rec: serde_json::Value = serde_json::from_slice(&std::fs::read(&cache).unwrap()).unwrap();
    assert_eq!(rec["format"], cohortpress::run::partial::FORMAT);
    assert_eq!(rec["failures"], serde_json::json!([]));
}

/// Before: `--incremental` checked the previous reports against their hashes but reused a
/// partial result (`cache/ID.json`, what the group report and tidy metrics are built from) as
/// found, so an edited one was carried into the new output and the run was no longer equal to a
/// full one. Now a partial result that is not as the previous manifest lists it is recomputed.
#[test]
fn an_incremental_run_recomputes_a_partial_result_edited_since() {
    let t = ProgramTest::demo(3);
    let full = out(&t, "full");
    assert_eq!(run(&t, &full, &[]).code, 0);
    let inc = out(&t, "inc");
    assert_eq!(run(&t, &inc, &[]).code, 0);
    let cache = Path::new(&inc).join("cache/SG-002.json");
    let mut rec: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&cache).unwrap()).unwrap();
    rec["summary"]["baseline_kg"] = "150.0".into();
    rec["tidy"]["scalars"] = serde_json::json!([]);
    std::fs::write(&cache, serde_json::to_vec_pretty(&rec).unwrap()).unwrap();
    let r = run(&t, &inc, &["--incremental"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        r.stderr.contains("2 participants reused, 1 recomputed"),
        "{}",
        r.stderr
    );
    assert_same_tree(&full, &inc);
}

#[test]
fn three_shards_merged_equal_a_single_run() {
    let t = ProgramTest::demo(12);
    let single = out(&t, "single");
    assert_eq!(run(&t, &single, &[]).code, 0);
    let mut shard_dirs = Vec::new();
    let mut seen = 0;
    for k in 1..=3 {
        let d = out(&t, &format!("shard{k}"));
        let r = run(&t, &d, &["--shard", &format!("{k}/3")]);
        assert_eq!(r.code, 0, "{}", r.stderr);
        let shard: serde_json::Value =
            serde_json::from_slice(&std::fs::read(Path::new(&d).join("shard.json")).unwrap())
                .unwrap();
        let ids = shard["participants"].as_array().unwrap();
        // Each participant's shard follows from their id alone.
        for id in ids {
            assert_eq!(
                cohortpress::run::shard::shard_of(id.as_str().unwrap(), 3),
                k,
                "{id} in shard {k}"
            );
        }
        seen += ids.len();
        assert!(
            !Path::new(&d).join("group").exists(),
            "a shard writes no group report"
        );
        shard_dirs.push(d);
    }
    assert_eq!(seen, 12, "every participant in exactly one shard");

    let merged = out(&t, "merged");
    let mut args = vec!["merge", "{dir}", "--out", merged.as_str()];
    // Any order of the shard folders.
    args.extend(shard_dirs.iter().rev().map(String::as_str));
    let m = t.run(&args);
    assert_eq!(m.code, 0, "{}", m.stderr);
    assert_same_tree(&single, &merged);

    // A missing shard is refused with the reason, and nothing is written.
    let partial = out(&t, "partial");
    let m = t.run(&[
        "merge",
        "{dir}",
        "--out",
        &partial,
        &shard_dirs[0],
        &shard_dirs[2],
    ]);
    assert_eq!(m.code, 2, "{}", m.stderr);
    // Only what is wrong, said once: it was "ERROR error: merge: … missing: [2/3], given
    // twice: []".
    assert!(
        m.stderr
            .contains("ERROR merge: every shard 1…3 is needed exactly once; missing: 2/3\n"),
        "{}",
        m.stderr
    );
    assert!(!m.stderr.contains("given twice"), "{}", m.stderr);
    assert!(!Path::new(&partial).exists());

    // Shards of a different run (another as-of date) are refused.
    let other = out(&t, "other2");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--out",
        &other,
        "--shard",
        "2/3",
    ]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    let m = t.run(&[
        "merge",
        "{dir}",
        "--out",
        &partial,
        &shard_dirs[0],
        &other,
        &shard_dirs[2],
    ]);
    assert_eq!(m.code, 2, "{}", m.stderr);
    assert!(m.stderr.contains("of a different run"), "{}", m.stderr);

    // Merging into one of the shards is refused, and that shard is left as it was.
    let shard_json = Path::new(&shard_dirs[1]).join("shard.json");
    let before = std::fs::read(&shard_json).unwrap();
    let mut args = vec!["merge", "{dir}", "--out", shard_dirs[1].as_str()];
    args.extend(shard_dirs.iter().map(String::as_str));
    let m = t.run(&args);
    assert_eq!(m.code, 2, "{}", m.stderr);
    assert!(
        m.stderr
            .contains("is one of the shard folders being merged"),
        "{}",
        m.stderr
    );
    assert_eq!(std::fs::read(&shard_json).unwrap(), before);
}

/// Runs the program as shards 1/2 and 2/2 (each must succeed) and returns their folders.
fn two_shards(t: &ProgramTest) -> Vec<String> {
    (1..=2)
        .map(|k| {
            let d = out(t, &format!("shard{k}"));
            let r = run(t, &d, &["--shard", &format!("{k}/2")]);
            assert_eq!(r.code, 0, "{}", r.stderr);
            d
        })
        .collect()
}

/// Before: `merge` checked each report against the hash its shard recorded but took the partial
/// results (`cache/ID.json`, what the group report and tidy metrics are built from) as found, so
/// an edited one was merged with exit 0 and the output differed from a single run's. Now it is
/// refused as an edited report is, and nothing is written.
#[test]
fn a_partial_result_edited_after_its_shard_ran_is_refused_by_merge() {
    let t = ProgramTest::demo(6);
    let shard_dirs = two_shards(&t);
    let shard: serde_json::Value = serde_json::from_slice(
        &std::fs::read(Path::new(&shard_dirs[0]).join("shard.json")).unwrap(),
    )
    .unwrap();
    let id = shard["participants"][0].as_str().unwrap();
    let cache = Path::new(&shard_dirs[0]).join(format!("cache/{id}.json"));
    let mut rec: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&cache).unwrap()).unwrap();
    rec["summary"]["baseline_kg"] = "150.0".into();
    std::fs::write(&cache, serde_json::to_vec(&rec).unwrap()).unwrap();

    let merged = out(&t, "merged");
    let mut args = vec!["merge", "{dir}", "--out", merged.as_str()];
    args.extend(shard_dirs.iter().map(String::as_str));
    let m = t.run(&args);
    assert_eq!(m.code, 6, "{}", m.stderr);
    assert!(
        m.stderr.contains(&format!(
            "{}: the file changed after its shard wrote it",
            cache.display()
        )),
        "{}",
        m.stderr
    );
    assert!(!Path::new(&merged).exists());
}

/// Before: `merge` took the shards' participants as they were when each shard ran. A folder
/// removed since (a participant who withdrew consent) was still in the merged group report and
/// tidy metrics, one added since was left out, and an edited weights.csv kept its old figures,
/// all with exit 0. Now each is refused (exit 2), nothing is written, and the shards are named
/// to be run again.
#[test]
fn merge_refuses_shards_of_participant_folders_that_changed_since() {
    let t = ProgramTest::demo(6);
    let shard_dirs = two_shards(&t);
    let merged = out(&t, "merged");
    let merge = || {
        let mut args = vec!["merge", "{dir}", "--out", merged.as_str()];
        args.extend(shard_dirs.iter().map(String::as_str));
        let m = t.run(&args);
        assert!(!Path::new(&merged).exists(), "{}", m.stderr);
        m
    };
    let folder = |id: &str| t.dir.join("participants").join(id);
    let hidden = t.dir.join("SG-002.away");

    std::fs::rename(folder("SG-002"), &hidden).unwrap();
    let m = merge();
    assert_eq!(m.code, 2, "{}", m.stderr);
    assert!(
        m.stderr.contains(
            "the participant folders changed since the shards ran (in no shard: []; in a shard, \
             but no longer in the program: [SG-002]); run the shards again"
        ),
        "{}",
        m.stderr
    );
    std::fs::rename(&hidden, folder("SG-002")).unwrap();

    std::fs::create_dir(folder("SG-099")).unwrap();
    for f in ["profile.yaml", "weights.csv"] {
        let text = std::fs::read_to_string(folder("SG-002").join(f)).unwrap();
        std::fs::write(folder("SG-099").join(f), text.replace("SG-002", "SG-099")).unwrap();
    }
    let m = merge();
    assert_eq!(m.code, 2, "{}", m.stderr);
    assert!(
        m.stderr
            .contains("(in no shard: [SG-099]; in a shard, but no longer in the program: [])"),
        "{}",
        m.stderr
    );
    std::fs::remove_dir_all(folder("SG-099")).unwrap();

    let weights = folder("SG-003").join("weights.csv");
    let before = std::fs::read(&weights).unwrap();
    let mut edited = before.clone();
    edited.extend_from_slice(b"\n");
    std::fs::write(&weights, &edited).unwrap();
    let m = merge();
    assert_eq!(m.code, 2, "{}", m.stderr);
    assert!(
        m.stderr.contains(
            "participant SG-003: participants/SG-003/weights.csv changed since the shards ran; \
             run the shards again"
        ),
        "{}",
        m.stderr
    );
    std::fs::write(&weights, &before).unwrap();

    std::fs::write(folder("SG-003").join("notes.txt"), "x").unwrap();
    let m = merge();
    assert_eq!(m.code, 2, "{}", m.stderr);
    assert!(
        m.stderr
            .contains("participant SG-003: the list of files in the folder changed"),
        "{}",
        m.stderr
    );
    std::fs::remove_file(folder("SG-003").join("notes.txt")).unwrap();

    // As the shards read them: merged.
    let mut args = vec!["merge", "{dir}", "--out", merged.as_str()];
    args.extend(shard_dirs.iter().map(String::as_str));
    let m = t.run(&args);
    assert_eq!(m.code, 0, "{}", m.stderr);
}

/// `examples/slurm-array.sh` as Slurm would run it (eight array tasks, then the merge job, with
/// the variables Slurm sets), on the real binary: the merged output equals a single run.
#[test]
fn the_slurm_example_runs_shards_and_merges_to_a_single_runs_output() {
    let t = ProgramTest::demo(12);
    let runs = t.dir.parent().unwrap().join("runs");
    let script = crate::harness::repo_root().join("examples/slurm-array.sh");
    let bin_dir = Path::new(BIN).parent().unwrap();
    let path = format!(
        "{}:{}",
        bin_dir.display(),
        std::env::var("PATH").unwrap_or_default()
    );
    let task = |extra: &[(&str, &str)]| {
        let out = Command::new("bash")
            .arg(&script)
            .env_clear()
            .env("PATH", &path)
            .env("PROGRAM", &t.dir)
            .env("PERIOD", "2026-09")
            .env("AS_OF", AS_OF)
            .env("RUNS", &runs)
            .env("SLURM_CPUS_PER_TASK", "1")
            .envs(extra.iter().copied())
            .stdin(Stdio::null())
            .output()
            .unwrap();
        assert!(out.status.success(), "{out:?}");
    };
    for k in 1..=8 {
        task(&[("SLURM_ARRAY_TASK_ID", &k.to_string())]);
    }
    task(&[("MERGE", "1")]);
    let single = out(&t, "single");
    assert_eq!(run(&t, &single, &["--period", "2026-09"]).code, 0);
    assert_same_tree(&single, &runs.join("2026-09/reports").to_string_lossy());
}

/// A period still under way (`--period` of the as-of date's month) is reported up to the as-of
/// date: the days after it have not happened yet. Counted as days without records, they made a
/// report on the 3rd say that nothing had been recorded for 27 days, and weekly rates were taken
/// over weeks still to come.
#[test]
fn a_period_still_under_way_is_reported_up_to_the_as_of_date() {
    let t = ProgramTest::demo(3);
    let o = out(&t, "r");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-09-10",
        "--period",
        "2026-09",
        "--out",
        &o,
        "--formats",
        "html",
    ]);
    // Exit 1: the demo's rows after 10 September are in the future of the as-of date (dropped
    // with a warning each).
    assert_eq!(r.code, 1, "{}", r.stderr);
    assert!(
        r.stderr.contains("it is reported up to 2026-09-10"),
        "{}",
        r.stderr
    );
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(Path::new(&o).join("manifest.json")).unwrap())
            .unwrap();
    assert_eq!(manifest["period_from"], "2026-09-01");
    assert_eq!(manifest["period_to"], "2026-09-10");
    let html = std::fs::read_to_string(Path::new(&o).join("participants/SG-001.html")).unwrap();
    assert!(
        html.contains("1 Sep 2026 – 10 Sep 2026"),
        "the report names the days it covers"
    );
}

/// Someone enrolled after the period's end (a re-issued earlier month, or a mistyped date) was
/// reported for that month and counted in its group figures as enrolled without a start. Now
/// they get no report for the period, are left out of its group rows, and the data-quality list
/// says why at the `enrolled` line of their profile.
#[test]
fn a_participant_enrolled_after_the_period_is_not_reported_for_it() {
    let t = ProgramTest::fixture("report-small");
    let profile = t.dir.join("participants/SG-018/profile.yaml");
    let text = std::fs::read_to_string(&profile).unwrap();
    std::fs::write(
        &profile,
        text.replace("enrolled: 2026-04-01", "enrolled: 2026-06-10"),
    )
    .unwrap();
    let out = t.dir.parent().unwrap().join("out-may");
    let o = t.run(&[
        "run",
        ".",
        "--period",
        "2026-05",
        "--as-of",
        AS_OF,
        "--out",
        &out.to_string_lossy(),
    ]);
    assert_eq!(o.code, cohortpress::exit_code::WARNINGS, "{o:?}");
    assert!(!out.join("participants/SG-018.html").exists());
    assert!(!out.join("participants/SG-018.pdf").exists());
    assert!(out.join("participants/SG-003.html").exists());
    assert!(
        o.stderr
            .contains("enrolled on 2026-06-10, after this period (2026-05-01 to 2026-05-31)"),
        "{o:?}"
    );
    let dq = std::fs::read_to_string(out.join("metrics/data-quality.csv")).unwrap();
    let row = dq
        .lines()
        .find(|l| l.contains("after this period"))
        .expect("a data-quality row");
    assert!(
        row.starts_with("warning,SG-018,participants/SG-018/profile.yaml,6,,enrolled,"),
        "{row}"
    );
    let tidy = std::fs::read_to_string(out.join("metrics/participants.csv")).unwrap();
    assert!(!tidy.contains("SG-018"), "{tidy}");
    // From the month they enrolled, they are reported.
    let out = t.dir.parent().unwrap().join("out-june");
    let o = t.run(&[
        "run",
        ".",
        "--period",
        "2026-06",
        "--as-of",
        AS_OF,
        "--out",
        &out.to_string_lossy(),
    ]);
    assert!(!o.stderr.contains("after this period"), "{o:?}");
    assert!(out.join("participants/SG-018.html").exists());
}

/// `--only SG-001,SG-002` (a list, as other tools take it) names one folder of that name: the
/// refusal said only that there was none; it now says how to name several.
#[test]
fn only_with_a_comma_list_says_to_repeat_the_option() {
    let t = ProgramTest::fixture("report-small");
    let ids: Vec<String> = std::fs::read_dir(t.dir.join("participants"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .take(2)
        .collect();
    let o = out(&t, "reports");
    let r = run(&t, &o, &["--only", &ids.join(",")]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains(&format!(
            "(to name several participants, give each its own --only: `--only {} --only {}`)",
            ids[0], ids[1]
        )),
        "{}",
        r.stderr
    );
    // An id that is simply not there gets no such advice.
    let r = run(&t, &o, &["--only", "NOPE-1,NOPE-2"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(!r.stderr.contains("give each its own"), "{}", r.stderr);
}

/// A folder refused while listing `participants/` (here a symbolic link) is answered for by
/// the runs that cover it: a whole run and a merge count it among the participants left out
/// (exit 4), `--only` another participant does not (exit 0: it was exit 4, with the link's
/// error, in a run that never looked at it), `--only` the link itself says it is there but
/// refused, and of three shards only the one whose share holds the name counts it.
#[test]
fn a_refused_folder_is_counted_by_the_runs_that_cover_it_only() {
    let t = ProgramTest::demo(6);
    let target = t.dir.join("participants/SG-001");
    let link = "SG-LINK";
    std::os::unix::fs::symlink(&target, t.dir.join("participants").join(link)).unwrap();

    let whole = run(&t, &out(&t, "whole"), &[]);
    assert_eq!(whole.code, 4, "{}", whole.stderr);
    assert!(whole.stderr.contains(link), "{}", whole.stderr);

    let one = run(&t, &out(&t, "one"), &["--only", "SG-002"]);
    assert_eq!(one.code, 0, "{}", one.stderr);
    assert!(!one.stderr.contains(link), "{}", one.stderr);

    let asked = run(&t, &out(&t, "asked"), &["--only", link]);
    assert_eq!(asked.code, 2, "{}", asked.stderr);
    assert!(
        asked.stderr.contains(&format!(
            "`{link}` is there but refused: the participant folder is a symbolic link"
        )),
        "{}",
        asked.stderr
    );

    let mut shard_dirs = Vec::new();
    for k in 1..=3 {
        let d = out(&t, &format!("shard{k}"));
        let r = run(&t, &d, &["--shard", &format!("{k}/3")]);
        let holds_it = cohortpress::run::shard::shard_of(link, 3) == k;
        assert_eq!(
            r.code,
            if holds_it { 4 } else { 0 },
            "shard {k}: {}",
            r.stderr
        );
        assert_eq!(r.stderr.contains(link), holds_it, "shard {k}: {}", r.stderr);
        shard_dirs.push(d);
    }
    let merged = out(&t, "merged");
    let mut args = vec!["merge", "{dir}", "--out", merged.as_str()];
    args.extend(shard_dirs.iter().map(String::as_str));
    let m = t.run(&args);
    assert_eq!(m.code, 4, "{}", m.stderr);
    assert!(m.stderr.contains(link), "{}", m.stderr);
}

/// Every line of `stderr` as JSON, or a panic naming the line that is not.
fn json_lines(what: &str, stderr: &str) -> Vec<serde_json::Value> {
    stderr
        .lines()
        .map(|l| {
            serde_json::from_str(l).unwrap_or_else(|e| panic!("{what}: not a JSON line ({e}): {l}"))
        })
        .collect()
}

#[test]
fn a_refused_command_line_is_logged_as_json_lines_when_the_json_log_was_asked_for() {
    // A crontab line with a typo in an option (or a lost argument) gave clap's usage text in
    // plain lines on standard error: a log collector parsing the JSON log broke on them, and no
    // line carried the exit code.
    let t = ProgramTest::fixture("report-small");
    let cases: [(&str, &[&str], &str); 4] = [
        (
            "an unknown option",
            &["run", "{dir}", "--log-format", "json", "--perod", "2026-09"],
            "--perod",
        ),
        (
            "a missing program",
            &["run", "--log-format=json", "--formats", "html"],
            "<PROGRAM>",
        ),
        (
            "a value that does not read",
            &["run", "{dir}", "--jobs", "many", "--log-format", "json"],
            "many",
        ),
        (
            "merge without its shards",
            &["merge", "{dir}", "--log-format", "json"],
            "<SHARD_DIR>",
        ),
    ];
    for (what, args, named) in cases {
        let r = t.run(args);
        assert_eq!(
            r.code,
            cohortpress::exit_code::USAGE,
            "{what}: {}",
            r.stderr
        );
        assert_eq!(r.stdout, "", "{what}");
        let lines = json_lines(what, &r.stderr);
        assert!(lines.len() >= 2, "{what}: {}", r.stderr);
        assert!(
            lines
                .iter()
                .all(|v| v["level"] == "ERROR" && v["timestamp"].is_string()),
            "{what}: {}",
            r.stderr
        );
        let reason = lines[0]["fields"]["message"].as_str().unwrap();
        assert!(
            reason.starts_with("the command line was refused: ") && reason.contains(named),
            "{what}: {reason}"
        );
        let last = lines.last().unwrap();
        assert_eq!(last["fields"]["exit_code"], 2, "{what}: {}", r.stderr);
    }
    // Without the JSON log, clap's own words, as before.
    let r = t.run(&["run", "{dir}", "--perod", "2026-09"]);
    assert_eq!(r.code, 2);
    assert!(
        r.stderr.starts_with("error: unexpected argument '--perod'"),
        "{}",
        r.stderr
    );
    // Help is not an error: it goes to standard output, as text, with exit code 0.
    let r = t.run(&["run", "--log-format", "json", "--help"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stdout.contains("Usage: cohortpress run"), "{}", r.stdout);
}

#[test]
fn a_logged_input_problem_carries_its_participant_file_line_and_column_as_fields() {
    // The JSON log's ERROR lines said where a problem was only inside the message text, so a
    // collector could not group or filter them by participant or file.
    let t = ProgramTest::fixture("broken-program");
    let r = run(
        &t,
        &out(&t, "r"),
        &["--log-format", "json", "--formats", "html"],
    );
    assert_eq!(
        r.code,
        cohortpress::exit_code::PARTICIPANT_ERRORS,
        "{}",
        r.stderr
    );
    let lines = json_lines("broken-program", &r.stderr);
    let about = |file: &str| {
        lines
            .iter()
            .find(|v| v["fields"]["file"] == file)
            .unwrap_or_else(|| panic!("no line with file {file}: {}", r.stderr))
            .clone()
    };
    let height = about("participants/bad-height-unit/profile.yaml");
    assert_eq!(height["level"], "ERROR");
    assert_eq!(height["fields"]["participant"], "bad-height-unit");
    assert_eq!(height["fields"]["line"], 4);
    assert_eq!(height["fields"]["column"], 9);
    assert_eq!(height["fields"]["field"], "height");
    assert!(
        height["fields"]["message"]
            .as_str()
            .unwrap()
            .starts_with("participant left out: participants/bad-height-unit/profile.yaml:4:9:"),
        "{height}"
    );
    let bytes = about("participants/non-utf8/activity.csv");
    assert_eq!(bytes["fields"]["participant"], "non-utf8");
    assert_eq!(
        (&bytes["fields"]["line"], &bytes["fields"]["column"]),
        (&serde_json::json!(3), &serde_json::json!(15))
    );
    // A missing column is pointed at (the value column that may carry the missing unit); a
    // problem without a line has no `line` or `column` field, and one without a participant
    // (a folder skipped for its name) no `participant`.
    let column = about("participants/missing-column/weights.csv");
    assert_eq!(column["fields"]["line"], 1);
    assert_eq!(column["fields"]["column"], 2, "{column}");
    let nowhere = about("participants/missing-profile/profile.yaml");
    assert!(nowhere["fields"].get("line").is_none(), "{nowhere}");
    assert!(nowhere["fields"].get("column").is_none(), "{nowhere}");
    let skipped = about("participants/bad id");
    assert!(skipped["fields"].get("participant").is_none(), "{skipped}");
    // The text log says it once, in the message: no fields repeated after it.
    let r = run(&t, &out(&t, "text"), &["--formats", "html"]);
    let line = r
        .stderr
        .lines()
        .find(|l| l.contains("participants/bad-height-unit/profile.yaml:4:9"))
        .unwrap_or_else(|| panic!("{}", r.stderr));
    assert!(
        !line.contains("participant=") && !line.contains("line=4"),
        "{line}"
    );
}

#[test]
fn a_run_that_ends_with_warnings_says_how_many_and_why_in_its_log() {
    // A stray file in participants/ (a warning about the program folder) ended a run with exit
    // code 1 while its last line said "0 warnings", and nothing above it at INFO or WARN said
    // why: the administrator reading the log had no way to know what to fix.
    let t = ProgramTest::demo(3);
    std::fs::write(t.dir.join("participants/notes.txt"), "to do").unwrap();
    let r = run(
        &t,
        &out(&t, "r"),
        &["--log-format", "json", "--formats", "html"],
    );
    assert_eq!(r.code, cohortpress::exit_code::WARNINGS, "{}", r.stderr);
    let lines = json_lines("stray file", &r.stderr);
    let done = lines.last().unwrap();
    let message = done["fields"]["message"].as_str().unwrap();
    assert!(message.starts_with("done in"), "{message}");
    assert!(message.contains(", 1 warning"), "{message}");
    assert_eq!(done["fields"]["exit_code"], 1);
    assert_eq!(done["fields"]["warnings"], 1, "{done}");
    assert_eq!(done["fields"]["participants_with_errors"], 0, "{done}");
    assert!(
        lines
            .iter()
            .any(|v| v["level"] == "WARN" && v["fields"]["file"] == "participants/notes.txt"),
        "{}",
        r.stderr
    );
    // With --quiet (WARN and above) the last line still carries the exit code: a run that is
    // not clean logs it at WARN. A clean quiet run logs no last line (only warnings such as the
    // new ledger's).
    let r = run(
        &t,
        &out(&t, "q"),
        &["--log-format", "json", "--formats", "html", "--quiet"],
    );
    assert_eq!(r.code, cohortpress::exit_code::WARNINGS, "{}", r.stderr);
    let lines = json_lines("quiet", &r.stderr);
    let done = lines.last().unwrap();
    assert_eq!(done["level"], "WARN", "{done}");
    assert_eq!(done["fields"]["exit_code"], 1, "{done}");
    std::fs::remove_file(t.dir.join("participants/notes.txt")).unwrap();
    let r = run(
        &t,
        &out(&t, "clean"),
        &["--log-format", "json", "--formats", "html", "--quiet"],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(!r.stderr.contains("done in"), "{}", r.stderr);
}

#[test]
fn a_debug_log_holds_cohortpress_lines_and_no_report_text() {
    // `COHORTPRESS_LOG=debug` (the README's "for more", and what the panic message asks for)
    // also turned on the template engine's and the HTML parser's debug lines: every report's
    // text went to the log, participants' names and weights with it, about 2,000 lines per
    // participant. The level is now cohortpress's own; libraries stay at warnings.
    let t = ProgramTest::demo(2);
    let profile = std::fs::read_to_string(t.dir.join("participants/SG-001/profile.yaml")).unwrap();
    let name = profile
        .lines()
        .find_map(|l| l.strip_prefix("name: "))
        .unwrap()
        .trim_matches('"')
        .to_string();
    let r = t.run_env(
        &["run", "{dir}", "--as-of", AS_OF, "--out", &out(&t, "r")],
        &[("COHORTPRESS_LOG", "debug")],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    // Debug lines write text escaped (`\u{141}ucja`).
    for written in [name.clone(), name.escape_default().to_string()] {
        assert!(!r.stderr.contains(&written), "{written} is in the log");
    }
    assert!(
        !r.stderr.contains("Current weight"),
        "{}",
        &r.stderr[..2000.min(r.stderr.len())]
    );
    // cohortpress's own debug lines are still there.
    assert!(
        r.stderr
            .lines()
            .any(|l| l.contains("DEBUG") && l.contains("output files")),
        "{}",
        r.stderr
    );
    assert!(
        r.stderr.lines().count() < 20,
        "{}",
        r.stderr.lines().count()
    );
    // A library named on its own is still logged as asked.
    let r = t.run_env(
        &[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--out",
            &out(&t, "s"),
            "--formats",
            "html",
        ],
        &[("COHORTPRESS_LOG", "info,handlebars=debug")],
    );
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(r.stderr.contains("Rendering"), "{}", r.stderr);
}

#[cfg(unix)]
#[test]
fn a_killed_run_into_another_months_folder_is_cleared_and_named_by_the_next_run() {
    // With a folder per month (the README's second crontab line), only a later run into the
    // same month's folder removed what a killed run left: June's run killed half way left
    // `.2026-06.staging` (half of June's identified reports) for good, and July's run said
    // nothing, so nothing in the log told that June had no output.
    let t = ProgramTest::demo(60);
    let (june, july, august) = (out(&t, "2026-06"), out(&t, "2026-07"), out(&t, "2026-08"));
    let june_shown = std::fs::canonicalize(t.dir.parent().unwrap())
        .unwrap()
        .join("2026-06")
        .display()
        .to_string();
    // A run into June still writing: its staging folder is left alone.
    let mut running = spawn_run(&t, &june, &["--jobs", "1"]);
    wait_for_files(&mut running, &staging_of(&june).join("participants"), 4);
    let r = run(&t, &july, &["--only", "SG-001", "--formats", "html"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        !r.stderr.contains("stopped before it finished"),
        "{}",
        r.stderr
    );
    assert!(count_files(&staging_of(&june)) >= 4);
    // Killed (SIGKILL): June has no output, and its staging folder is what is left of it.
    running.kill().unwrap();
    running.wait().unwrap();
    assert!(!Path::new(&june).exists());
    let left = count_files(&staging_of(&june));
    assert!(left >= 5, "{left}");
    let r = run(&t, &august, &["--only", "SG-001", "--formats", "html"]);
    assert_eq!(r.code, 0, "{}", r.stderr);
    assert!(
        !staging_of(&june).exists(),
        "June's staging folder was left"
    );
    let said = r
        .stderr
        .lines()
        .find(|l| l.contains("stopped before it finished"))
        .unwrap_or_else(|| panic!("{}", r.stderr));
    assert!(said.contains("WARN"), "{said}");
    assert!(
        said.contains(&format!(
            "a run into {june_shown} was stopped before it finished"
        )),
        "{said}"
    );
    // The marker is not counted: the files a reader would find.
    assert!(said.contains(&format!("({} files,", left - 1)), "{said}");
    assert!(
        said.contains(&format!(
            "{june_shown} was never written: run that period again"
        )),
        "{said}"
    );
    // July's output and the August run's own are complete.
    assert!(Path::new(&july).join("manifest.json").is_file());
    assert!(Path::new(&august).join("manifest.json").is_file());
}

#[test]
fn a_run_with_participant_warnings_says_whose_files_in_its_log() {
    // A weights file cut short by a crashed sync (its end zero-filled) ended the run with exit
    // code 1 and a last line "2 warnings", and nothing in the log said whose file or what: an
    // administrator had to open metrics/data-quality.csv to learn it.
    let t = ProgramTest::demo(3);
    let weights = t.dir.join("participants/SG-002/weights.csv");
    let mut bytes = std::fs::read(&weights).unwrap();
    let lines = bytes.iter().filter(|&&b| b == b'\n').count();
    bytes.extend_from_slice(&[0u8; 40]);
    std::fs::write(&weights, bytes).unwrap();
    let r = run(
        &t,
        &out(&t, "r"),
        &["--log-format", "json", "--formats", "html", "--quiet"],
    );
    assert_eq!(r.code, cohortpress::exit_code::WARNINGS, "{}", r.stderr);
    let lines_logged = json_lines("warnings", &r.stderr);
    let said = lines_logged
        .iter()
        .find(|v| {
            v["fields"]["message"]
                .as_str()
                .is_some_and(|m| m.contains("input warning"))
        })
        .unwrap_or_else(|| panic!("{}", r.stderr));
    assert_eq!(said["level"], "WARN", "{said}");
    let message = said["fields"]["message"].as_str().unwrap();
    assert!(
        message.starts_with(
            "1 input warning in the files of 1 participant, each listed in \
             metrics/data-quality.csv (and by `cohortpress check`): SG-002: weights.csv 1 \
             (line "
        ),
        "{message}"
    );
    assert!(
        message.contains(&format!(
            "line {}: the file ends with 40 zero bytes, which are not read",
            lines + 1
        )),
        "{message}"
    );
    // The last line still ends the log, with the count.
    let done = lines_logged.last().unwrap();
    assert_eq!(done["fields"]["warnings"], 1, "{done}");
}

/// A monthly cron line that first runs before the program's first month has ended (program from
/// 1 April, run on 20 April) stopped with "command line: the period 2026-03-01 to 2026-03-31 lies
/// outside the program", about a command line that named no period. It says now where the
/// period came from and when the first month can be reported; still exit 2, nothing written.
#[test]
fn a_run_before_the_first_month_has_ended_says_when_it_can_report() {
    let t = ProgramTest::fixture("report-small");
    let r = t.run(&["run", "{dir}", "--as-of", "2026-04-20"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains(
            "no full month of the program has ended by the as-of date 2026-04-20: program.yaml's `report.period: last_full_month` gives 2026-03-01 to 2026-03-31, before the program starts on 2026-04-01; the first month, 2026-04, can be reported from 2026-05-01 (or now with `--from 2026-04-01 --to 2026-04-20`)"
        ),
        "{}",
        r.stderr
    );
    assert!(!t.dir.join("reports").exists());
    // The way out it names works.
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-04-20",
        "--from",
        "2026-04-01",
        "--to",
        "2026-04-20",
    ]);
    assert!(r.code <= 1, "{}", r.stderr);
    // A --period outside the program keeps its own words.
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-04-20",
        "--period",
        "2026-03",
    ]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr
            .contains("the period 2026-03-01 to 2026-03-31 lies outside the program"),
        "{}",
        r.stderr
    );
}

/// Run before the program has even started (a cron line set up in March for a program from
/// 1 April): the message offered "or now with `--from 2026-04-01 --to 2026-03-20`", a period
/// that ends before it begins and that the tool refuses ("--from 2026-04-01 is after --to
/// 2026-03-20"). No period can be reported yet, and the message says when the first can.
#[test]
fn a_run_before_the_program_starts_offers_no_period_that_ends_before_it_begins() {
    let t = ProgramTest::fixture("report-small");
    let r = t.run(&["run", "{dir}", "--as-of", "2026-03-20"]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains(
            "the first month, 2026-04, can be reported from 2026-05-01; the program starts after the as-of date, so no part of it can be reported yet"
        ),
        "{}",
        r.stderr
    );
    assert!(!r.stderr.contains("--to 2026-03-20"), "{}", r.stderr);
    assert!(!t.dir.join("reports").exists());
}

/// Rows dated after the program's end (a sync that went on, a file merged from a later export)
/// are read and enter no figure; the log said nothing of them. A run, and a merge of its shards,
/// now say once how many there are and in which files, and that no figure uses them.
#[test]
fn rows_after_the_program_s_end_are_counted_once_in_the_log() {
    let t = ProgramTest::fixture("report-small");
    let append = |file: &str, rows: &str| {
        let path = t.dir.join("participants").join(file);
        let mut text = std::fs::read_to_string(&path).unwrap();
        text.push_str(rows);
        std::fs::write(&path, text).unwrap();
    };
    append(
        "SG-003/weights.csv",
        "2026-10-05,210.2,lb,home-scale\n2026-10-12,209.9,lb,home-scale\n",
    );
    append(
        "SG-007/weights.csv",
        "2026-10-03,07:05,66.4,kg,home-scale\n2026-10-10,07:02,66.1,kg,home-scale\n2026-10-17,07:04,66.0,kg,home-scale\n",
    );
    append("SG-007/intake.csv", "2026-10-01,1400\n2026-10-02,1390\n");
    let line = "7 rows dated after the program's end (2026-09-30) in the files of 2 participants \
                (intake.csv 2, weights.csv 5): read, but not used in any report or figure, \
                which stop at the period's end; program.yaml's `program.end` is the last day \
                any report covers";
    let once = |stderr: &str| {
        assert_eq!(stderr.matches(line).count(), 1, "{stderr}");
        assert_eq!(stderr.matches("dated after the program's end").count(), 1);
    };
    let r = t.run(&["run", "{dir}", "--as-of", "2026-11-02", "--out", "whole"]);
    assert!(r.code <= 1, "{}", r.stderr);
    once(&r.stderr);
    // Not one figure moved: the reports are those of the files without the later rows.
    let html = std::fs::read_to_string(t.dir.join("whole/participants/SG-007.html")).unwrap();
    assert!(!html.contains("Oct 2026"), "an October row in the report");
    // Shards, then their merge: the merge says it once (each shard holds its own part).
    let mut shards = Vec::new();
    for k in 1..=2 {
        let out = format!("shard{k}");
        let r = t.run(&[
            "run",
            "{dir}",
            "--as-of",
            "2026-11-02",
            "--shard",
            &format!("{k}/2"),
            "--out",
            &out,
        ]);
        assert!(r.code <= 1, "{}", r.stderr);
        shards.push(out);
    }
    let mut args = vec!["merge", "{dir}", "--out", "merged"];
    args.extend(shards.iter().map(String::as_str));
    let m = t.run(&args);
    assert!(m.code <= 1, "{}", m.stderr);
    once(&m.stderr);
    // Before the end there are none to speak of.
    let r = t.run(&["run", "{dir}", "--as-of", "2026-09-30", "--out", "sept"]);
    assert!(r.code <= 1, "{}", r.stderr);
    assert!(
        !r.stderr.contains("after the program's end"),
        "{}",
        r.stderr
    );
}

/// A monthly cron line left in place after the program's end: the run without `--period`
/// reported September again each month, and no line of its log said that the program was
/// over; the line with `--period` of a month after the end said only that the period "lies
/// outside the program". Now the log says the program ended on 2026-09-30, what the run
/// reports, and what it wrote (or that it wrote nothing) and what to do.
#[test]
fn a_run_after_the_program_ended_says_so_in_its_log() {
    let t = ProgramTest::fixture("report-small");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--log-format",
        "json",
    ]);
    assert!(r.code <= 1, "{}", r.stderr);
    let messages: Vec<String> = r
        .stderr
        .lines()
        .map(|l| {
            let v: serde_json::Value = serde_json::from_str(l).unwrap();
            v["fields"]["message"].as_str().unwrap_or("").to_string()
        })
        .collect();
    assert!(
        messages.iter().any(|m| m
            == "the program ended on 2026-09-30 (program.yaml's `program.end`): this run reports 2026-09-01 to 2026-09-30 with the data as of 2026-12-02; no period after the end is ever reported"),
        "{messages:#?}"
    );
    // The line before the last says what the run wrote.
    assert_eq!(
        messages[messages.len() - 2],
        "the program ended on 2026-09-30: this run wrote 4 participant reports for 2026-09-01 to 2026-09-30 and the group report, as of 2026-12-02; once no more data are expected, remove the line that starts it"
    );
    assert!(messages.last().unwrap().starts_with("done in "));
    // Before the end, neither line.
    let r = t.run(&["run", "{dir}", "--as-of", "2026-09-15"]);
    assert!(r.code <= 1, "{}", r.stderr);
    assert!(!r.stderr.contains("the program ended"), "{}", r.stderr);
    // A month after the end, named: nothing written, and said so.
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--period",
        "2026-11",
        "--out",
        "nov",
    ]);
    assert_eq!(r.code, 2, "{}", r.stderr);
    assert!(
        r.stderr.contains(
            "the period 2026-11-01 to 2026-11-30 lies outside the program (2026-04-01 to 2026-09-30): the program ended on 2026-09-30, so nothing is reported and nothing was written"
        ),
        "{}",
        r.stderr
    );
    assert!(!t.dir.join("nov").exists());
}

/// The cron line's clock set back (or a wrong `--as-of`): the run reported June into the folder
/// that held September's reports and replaced them without a word (tryout24: March's reports
/// replaced by December's). Now it says so at WARN, with what to do; a month named with
/// `--period` says nothing.
#[test]
fn a_run_whose_period_goes_back_says_it_replaces_a_later_one() {
    let t = ProgramTest::fixture("report-small");
    let r = t.run(&["run", "{dir}", "--as-of", "2026-10-02", "--formats", "html"]);
    assert!(r.code <= 1, "{}", r.stderr);
    assert!(!r.stderr.contains("a later period"), "{}", r.stderr);
    let r = t.run(&["run", "{dir}", "--as-of", "2026-07-02", "--formats", "html"]);
    assert!(r.code <= 1, "{}", r.stderr);
    assert!(
        r.stderr.contains(
            "holds the reports of 2026-09-01 to 2026-09-30, a later period than this run's \
             (2026-06-01 to 2026-06-30, which program.yaml's `report.period` gives for the as-of \
             date 2026-07-02): this run replaces them with the earlier period's; if the \
             machine's clock or --as-of is wrong, correct it and run again"
        ),
        "{}",
        r.stderr
    );
    // Forward again, and a month named by hand: nothing said.
    let r = t.run(&["run", "{dir}", "--as-of", "2026-10-02", "--formats", "html"]);
    assert!(!r.stderr.contains("a later period"), "{}", r.stderr);
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-10-02",
        "--period",
        "2026-05",
        "--formats",
        "html",
    ]);
    assert!(r.code <= 1, "{}", r.stderr);
    assert!(!r.stderr.contains("a later period"), "{}", r.stderr);
}

/// A month reported again by hand after the program's end, its period named on the command
/// line (a monthly cron run that was missed, made up in May): its log read "no period after the
/// end is ever reported" and "once no more data are expected, remove the line that starts it",
/// words for a cron line without `--period`, which this run is not. Now neither line; the run
/// is otherwise the same.
#[test]
fn a_month_named_after_the_programs_end_is_not_told_to_remove_a_cron_line() {
    let t = ProgramTest::fixture("report-small");
    for named in [
        &["--period", "2026-08", "--out", "aug"][..],
        &[
            "--from",
            "2026-08-01",
            "--to",
            "2026-08-31",
            "--out",
            "aug2",
        ][..],
    ] {
        let mut args = vec!["run", "{dir}", "--as-of", "2026-12-02"];
        args.extend_from_slice(named);
        let r = t.run(&args);
        assert!(r.code <= 1, "{}", r.stderr);
        assert!(
            r.stderr.contains("period 2026-08-01 to 2026-08-31"),
            "{}",
            r.stderr
        );
        assert!(!r.stderr.contains("the program ended"), "{}", r.stderr);
        assert!(!r.stderr.contains("remove the line"), "{}", r.stderr);
    }
}

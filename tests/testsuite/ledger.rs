//! The group report's ledger folder: `report.state_dir` in program.yaml, `--state` on the
//! command line, and the refusal of a ledger among the inputs.

use crate::harness::{ProgramTest, tree_hashes};

const AS_OF: &str = "2026-12-01";

fn set_state_dir(t: &ProgramTest, value: &str) {
    let path = t.dir.join("program.yaml");
    let yaml = std::fs::read_to_string(&path).unwrap();
    let yaml = yaml.replace("report:\n", &format!("report:\n  state_dir: {value}\n"));
    std::fs::write(path, yaml).unwrap();
}

#[test]
fn group_ledger_goes_where_report_state_dir_says_and_state_wins() {
    let t = ProgramTest::fixture("report-small");
    set_state_dir(&t, "kept/ledger");
    let o = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(o.code, 0, "{o:?}");
    let ledger = t.dir.join("kept/ledger/ledger.json");
    let text = std::fs::read_to_string(&ledger).expect("the ledger is where the key says");
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    assert_eq!(v["releases"].as_array().unwrap().len(), 1);
    assert!(
        !t.dir.join("reports.ledger").exists(),
        "no ledger at the default place"
    );
    // `--state` on the command line wins over the key (a new ledger beside the report the
    // key's ledger recorded, so it is meant: `--new-ledger`).
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--state",
        "elsewhere",
        "--new-ledger",
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(t.dir.join("elsewhere/ledger.json").is_file());
}

#[test]
fn group_ledger_inside_participants_is_refused_with_its_line() {
    let t = ProgramTest::fixture("report-small");
    set_state_dir(&t, "participants/ledger");
    let before = tree_hashes(&t.dir);
    let o = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(o.code, cohortpress::exit_code::PROGRAM_INVALID, "{o:?}");
    assert!(o.stderr.contains("report.state_dir"), "{}", o.stderr);
    assert!(o.stderr.contains("participants/"), "{}", o.stderr);
    assert!(o.stderr.contains(":29"), "the key's line: {}", o.stderr);
    assert_eq!(tree_hashes(&t.dir), before, "nothing written");
    // The same folder named on the command line is refused too (a usage error).
    let t = ProgramTest::fixture("report-small");
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--state",
        "participants/x",
    ]);
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(!t.dir.join("participants/x").exists());
}

/// A ledger folder named through a symbolic link is judged where it really is: a link to a
/// participant's folder (the ledger's key and file would be written among the inputs) or into
/// the output folder (replaced by every run, so the audit across releases would start from
/// nothing each month) is refused like the folder named directly, on the command line (exit 2)
/// and in program.yaml (exit 3, by `check` too), and nothing is written.
#[cfg(unix)]
#[test]
fn group_ledger_reached_through_a_link_is_judged_where_it_really_is() {
    let t = ProgramTest::fixture("report-small");
    let outside = t.dir.parent().unwrap();
    let into_participant = outside.join("state-link");
    std::os::unix::fs::symlink(t.dir.join("participants/SG-003"), &into_participant).unwrap();
    let before = tree_hashes(&t.dir);
    let state = into_participant.to_string_lossy().into_owned();
    let args = ["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
    let o = t.run(&[&args[..], &["--state", &state]].concat());
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(o.stderr.contains("participants/"), "{}", o.stderr);
    assert_eq!(
        tree_hashes(&t.dir),
        before,
        "nothing written among the inputs"
    );
    // `..` after the link is the participant folder's parent, `participants/`, as the system
    // resolves it (not the link's folder, as the path reads): `LINK/../ledger` put the ledger in
    // `participants/ledger`, which every later run read as a participant without a profile.
    let state = into_participant
        .join("../ledger")
        .to_string_lossy()
        .into_owned();
    let o = t.run(&[&args[..], &["--state", &state]].concat());
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(o.stderr.contains("participants/"), "{}", o.stderr);
    assert!(!t.dir.join("participants/ledger").exists());
    assert!(!outside.join("ledger").exists());
    assert_eq!(tree_hashes(&t.dir), before);

    // Into the output folder through a link (a complete output exists there first).
    let out = outside.join("out");
    let out_s = out.to_string_lossy().into_owned();
    let o = t.run(&[&args[..], &["--out", &out_s]].concat());
    assert_eq!(o.code, 0, "{o:?}");
    let into_out = outside.join("out-link");
    std::os::unix::fs::symlink(&out, &into_out).unwrap();
    let state = into_out.join("ledger").to_string_lossy().into_owned();
    let o = t.run(&[&args[..], &["--out", &out_s, "--state", &state]].concat());
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr.contains("inside the output folder"),
        "{}",
        o.stderr
    );
    assert!(!out.join("ledger").exists());

    // The same link in program.yaml: the program is invalid, for `check` as for `run`.
    set_state_dir(&t, &into_participant.to_string_lossy());
    let before = tree_hashes(&t.dir);
    for cmd in ["check", "run"] {
        let o = t.run(&[cmd, "{dir}", "--as-of", AS_OF]);
        assert_eq!(
            o.code,
            cohortpress::exit_code::PROGRAM_INVALID,
            "{cmd}: {o:?}"
        );
        assert!(
            o.stderr.contains("report.state_dir") || o.stdout.contains("report.state_dir"),
            "{o:?}"
        );
    }
    assert_eq!(tree_hashes(&t.dir), before);
}

/// A run into a folder of its own (`--out`: a preview, a re-issue, a folder per month) is
/// audited against the program's ledger when the program's own output has one, instead of a
/// new, empty ledger beside the new folder. Real figures of the sample program: its September
/// report printed 30 people at 3 % loss; the same month cut two days short (to 28 September)
/// would print 31, and the difference is one person's milestone. Against the program's ledger
/// that count is hidden (a range). With no ledger anywhere yet, the run makes the program's
/// own (not one beside its `--out`), so the next run finds it, and says so (INFO).
#[test]
fn a_run_into_another_folder_is_audited_against_the_programs_ledger() {
    let t = ProgramTest::sample();
    let as_of = ["--as-of", "2026-10-05", "--formats", "html"];
    let o = t.run(&[&["run", "{dir}"][..], &as_of].concat());
    assert_eq!(o.code, 4, "{o:?}"); // the sample's planted errors
    let group = |dir: &std::path::Path| -> serde_json::Value {
        serde_json::from_slice(&std::fs::read(dir.join("metrics/group.json")).unwrap()).unwrap()
    };
    let reached_3 = |g: &serde_json::Value| g["program"]["stats"]["milestones"][0].clone();
    let first = reached_3(&group(&t.dir.join("reports")));
    assert_eq!(first["loss_at_least_percent"], 3.0);
    // 31 of 50 since SG-050 and SG-051 joined the sample (she reached 3 %, he did not).
    assert_eq!(first["reached"]["value"], 31, "{first}");

    let other = t.dir.parent().unwrap().join("short-month");
    let other_s = other.to_string_lossy().into_owned();
    let cut = [
        "--from",
        "2026-09-01",
        "--to",
        "2026-09-28",
        "--out",
        &other_s,
    ];
    let o = t.run(&[&["run", "{dir}"][..], &as_of, &cut].concat());
    assert_eq!(o.code, 4, "{o:?}");
    let second = reached_3(&group(&other));
    assert_eq!(second["reached"]["suppressed"], true, "{second}");
    assert!(second["reached"].get("value").is_none(), "{second}");
    assert!(!t.dir.parent().unwrap().join("short-month.ledger").exists());
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(t.dir.join("reports.ledger/ledger.json")).unwrap())
            .unwrap();
    assert_eq!(ledger["releases"].as_array().unwrap().len(), 2);
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);

    // No ledger at all yet: the run makes the program's own (it made `elsewhere.ledger` and
    // warned that its audit started from nothing, as would every later run into a new folder).
    let fresh = ProgramTest::sample();
    let out = fresh.dir.parent().unwrap().join("elsewhere");
    let out_s = out.to_string_lossy().into_owned();
    let o = fresh.run(&[&["run", "{dir}"][..], &as_of, &["--out", &out_s]].concat());
    assert_eq!(o.code, 4, "{o:?}");
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);
    assert!(
        o.stderr.contains(&format!(
            "group-report ledger {}: created as this program's own ledger",
            fresh.dir.join("reports.ledger").display()
        )),
        "{}",
        o.stderr
    );
    assert!(fresh.dir.join("reports.ledger/ledger.json").is_file());
    assert!(
        !fresh
            .dir
            .parent()
            .unwrap()
            .join("elsewhere.ledger")
            .exists()
    );
}

/// A program renamed (`program.id` edited, e.g. for a re-issue) keeps its participants, its
/// output's ledger and its sponsor; the ledger's audit took only the releases of the new id, so
/// the re-issue was audited against nothing, with no word. The sample's September report
/// printed 30 people at 3 % loss and the month cut two days short printed 31 under the new id:
/// the difference is one person's milestone. Every release the ledger holds is audited
/// against (person tokens depend on the participant id alone; another program's people only
/// make the audit stricter).
#[test]
fn a_program_renamed_is_audited_against_the_releases_of_its_old_name() {
    let t = ProgramTest::sample();
    let as_of = ["--as-of", "2026-10-05", "--formats", "html"];
    let o = t.run(&[&["run", "{dir}"][..], &as_of].concat());
    assert_eq!(o.code, 4, "{o:?}"); // the sample's planted errors
    let yaml_path = t.dir.join("program.yaml");
    let yaml = std::fs::read_to_string(&yaml_path).unwrap();
    assert!(yaml.contains("id: steady-ground-2026 "));
    let yaml = yaml.replace("id: steady-ground-2026 ", "id: steady-ground-2026-reissue ");
    std::fs::write(&yaml_path, yaml).unwrap();
    let other = t.dir.parent().unwrap().join("reissue");
    let other_s = other.to_string_lossy().into_owned();
    let cut = [
        "--from",
        "2026-09-01",
        "--to",
        "2026-09-28",
        "--out",
        &other_s,
    ];
    let o = t.run(&[&["run", "{dir}"][..], &as_of, &cut].concat());
    assert_eq!(o.code, 4, "{o:?}");
    // Every count printed exactly in both reports, by where it stands in group.json.
    fn exact_counts(v: &serde_json::Value, path: String, out: &mut Vec<(String, u64)>) {
        match v {
            serde_json::Value::Object(m) => {
                if let Some(n) = m.get("value").and_then(serde_json::Value::as_u64) {
                    out.push((path.clone(), n));
                }
                for (k, x) in m {
                    exact_counts(x, format!("{path}.{k}"), out);
                }
            }
            serde_json::Value::Array(a) => {
                for (i, x) in a.iter().enumerate() {
                    exact_counts(x, format!("{path}[{i}]"), out);
                }
            }
            _ => {}
        }
    }
    let counts = |dir: &std::path::Path| {
        let g: serde_json::Value =
            serde_json::from_slice(&std::fs::read(dir.join("metrics/group.json")).unwrap())
                .unwrap();
        let mut out = Vec::new();
        exact_counts(&g["program"], "program".into(), &mut out);
        exact_counts(&g["splits"], "splits".into(), &mut out);
        out
    };
    let first = counts(&t.dir.join("reports"));
    let second = counts(&other);
    let reached_3 = "program.stats.milestones[0].reached";
    assert!(
        first.iter().any(|(p, n)| p == reached_3 && *n == 31),
        "{first:?}"
    );
    let small: Vec<String> = second
        .iter()
        .filter(|(p, _)| !p.contains("trajectory"))
        .filter_map(|(p, n)| {
            let (_, m) = first.iter().find(|(q, _)| q == p)?;
            (1..11)
                .contains(&n.abs_diff(*m))
                .then(|| format!("{p}: {m} then {n}"))
        })
        .collect();
    assert!(small.is_empty(), "{small:?}");
}

/// Runs into different output folders may share one ledger (the program's): a run waits for
/// another that is using it (an OS lock on `ledger.lock`, held from opening the ledger to
/// recording the release), so neither loses the other's record. Here the test holds the lock:
/// the run says it is waiting, and once the lock is released it finishes and records its release
/// next to the first one.
#[test]
fn a_run_waits_for_another_using_the_same_ledger() {
    use std::io::BufRead;
    let t = ProgramTest::fixture("report-small");
    let o = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(o.code, 0, "{o:?}");
    let lock = std::fs::File::options()
        .write(true)
        .open(t.dir.join("reports.ledger/ledger.lock"))
        .expect("the ledger's lock file");
    lock.lock().unwrap();
    let other = t.dir.parent().unwrap().join("august");
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
        .args([
            "run",
            &t.dir.to_string_lossy(),
            "--as-of",
            AS_OF,
            "--formats",
            "html",
        ])
        .args(["--period", "2026-08", "--out", &other.to_string_lossy()])
        .current_dir(&t.dir)
        .env_clear()
        .env("PATH", std::env::var("PATH").unwrap_or_default())
        .env("HOME", t.dir.parent().unwrap())
        .stdin(std::process::Stdio::null())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let mut stderr = std::io::BufReader::new(child.stderr.take().unwrap());
    let mut seen = String::new();
    loop {
        let mut line = String::new();
        if stderr.read_line(&mut line).unwrap() == 0 {
            panic!("the run ended without waiting for the ledger: {seen}");
        }
        seen.push_str(&line);
        if line.contains("waiting for another run that is using the group-report ledger") {
            break;
        }
    }
    assert!(!other.exists(), "nothing is in place while the run waits");
    drop(lock);
    std::io::copy(&mut stderr, &mut std::io::sink()).unwrap();
    assert_eq!(child.wait().unwrap().code(), Some(0));
    assert!(other.join("group/program.html").is_file());
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(t.dir.join("reports.ledger/ledger.json")).unwrap())
            .unwrap();
    assert_eq!(ledger["releases"].as_array().unwrap().len(), 2);
}

/// The ledger is saved through a temporary file beside it; a link planted under that name
/// (`ledger.tmp`, `secret.tmp`) is removed, never written through, so a file elsewhere keeps
/// its content.
#[cfg(unix)]
#[test]
fn the_ledger_never_writes_through_a_planted_link() {
    let t = ProgramTest::fixture("report-small");
    let base = t.dir.parent().unwrap();
    let state = base.join("state");
    std::fs::create_dir(&state).unwrap();
    let victims = [base.join("victim-ledger.txt"), base.join("victim-key.txt")];
    for v in &victims {
        std::fs::write(v, "keep me\n").unwrap();
    }
    std::os::unix::fs::symlink(&victims[0], state.join("ledger.tmp")).unwrap();
    std::os::unix::fs::symlink(&victims[1], state.join("secret.tmp")).unwrap();
    let state_s = state.to_string_lossy().into_owned();
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--state",
        &state_s,
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    for v in &victims {
        assert_eq!(
            std::fs::read_to_string(v).unwrap(),
            "keep me\n",
            "{}",
            v.display()
        );
    }
    assert!(state.join("ledger.json").is_file());
    assert_eq!(std::fs::read(state.join("secret.key")).unwrap().len(), 32);
}

#[test]
fn a_release_the_ledger_cannot_record_is_not_published() {
    let t = ProgramTest::fixture("report-small");
    let run = |as_of: &str| t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
    assert_eq!(run(AS_OF).code, 0);
    let out = t.dir.join("reports");
    let before = tree_hashes(&out);
    let ledger = t.dir.join("reports.ledger/ledger.json");
    let recorded = std::fs::read(&ledger).unwrap();
    // The ledger cannot be saved (a folder where its temporary file goes: as a full disk or a
    // read-only state folder would, also for root).
    std::fs::create_dir_all(t.dir.join("reports.ledger/ledger.tmp/x")).unwrap();
    // Another month: a release the ledger has not recorded (the same month again, run on
    // another day, is the same release and records nothing).
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--period",
        "2026-08",
        "--formats",
        "html",
    ]);
    assert_eq!(o.code, 6, "{o:?}");
    assert!(o.stderr.contains("group-report ledger"), "{}", o.stderr);
    // Named as the user knows it: the ledger file, not the temporary file (alone, it read
    // "reports.ledger/ledger.tmp: Is a directory"), and what became of the outputs.
    assert!(
        o.stderr.contains("reports.ledger/ledger.json: ")
            && o.stderr.contains(
                "(written through ledger.tmp beside it; the file was not changed); the previous outputs in "
            )
            && o.stderr.contains("/reports were left as they were"),
        "{}",
        o.stderr
    );
    // The new group report was put in place all the same, unrecorded: later audits never saw it.
    assert_eq!(
        tree_hashes(&out),
        before,
        "the previous output is left intact"
    );
    assert_eq!(std::fs::read(&ledger).unwrap(), recorded);
    assert!(!t.dir.join(".reports.staging").exists());
}

#[test]
fn a_ledger_that_lost_its_key_is_not_used_with_a_new_one() {
    let t = ProgramTest::fixture("report-small");
    let run = |as_of: &str| t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
    assert_eq!(run(AS_OF).code, 0);
    let out = t.dir.join("reports");
    let before = tree_hashes(&out);
    // The key deleted (or not restored with the ledger): a new key was made, under which no
    // earlier count linked to anyone, so the audit across releases passed what it would have
    // hidden (on the sample program, 657 figures hidden with the key, 462 with a new one).
    let key = t.dir.join("reports.ledger/secret.key");
    std::fs::remove_file(&key).unwrap();
    let o = run("2026-12-02");
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr
            .contains("secret.key: missing, while ledger.json records 1 earlier release"),
        "{}",
        o.stderr
    );
    assert!(!key.exists(), "no new key is made");
    assert_eq!(
        tree_hashes(&out),
        before,
        "the previous output is left intact"
    );
}

#[test]
fn a_key_that_does_not_belong_to_the_ledger_is_refused() {
    let t = ProgramTest::fixture("report-small");
    let run = |as_of: &str| t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
    assert_eq!(run(AS_OF).code, 0);
    let out = t.dir.join("reports");
    let before = tree_hashes(&out);
    // Another program's key, or one from another backup: as blind as a new key.
    let key = t.dir.join("reports.ledger/secret.key");
    let right = std::fs::read(&key).unwrap();
    let other: Vec<u8> = right.iter().map(|b| b ^ 0x5a).collect();
    std::fs::write(&key, &other).unwrap();
    let o = run("2026-12-02");
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr
            .contains("secret.key: not the key ledger.json was written with"),
        "{}",
        o.stderr
    );
    assert_eq!(
        tree_hashes(&out),
        before,
        "the previous output is left intact"
    );
    // The right key back: the run goes on.
    std::fs::write(&key, &right).unwrap();
    assert_eq!(run("2026-12-02").code, 0);
}

/// `report.out` edited each month (`reports-a`, then `reports-b`): each month got a ledger of
/// its own beside its folder, and the second report was audited against nothing (a warning
/// only). The ledger beside that records the program's releases is now the one used.
#[test]
fn a_ledger_beside_that_holds_the_programs_releases_is_the_one_used() {
    let t = ProgramTest::fixture("report-small");
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    assert!(
        text.contains("\n  out: reports\n"),
        "the fixture names its output folder"
    );
    let with_out = |out: &str| {
        std::fs::write(
            &yaml,
            text.replace("\n  out: reports\n", &format!("\n  out: {out}\n")),
        )
        .unwrap();
    };
    let run = |as_of: &str| t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
    with_out("reports-a");
    let o = run(AS_OF);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);
    with_out("reports-b");
    // Another month, so the ledger records a second release.
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--period",
        "2026-08",
        "--formats",
        "html",
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);
    assert!(!t.dir.join("reports-b.ledger").exists());
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(t.dir.join("reports-a.ledger/ledger.json")).unwrap())
            .unwrap();
    assert_eq!(ledger["releases"].as_array().unwrap().len(), 2);
    // One sentence, not the source's indentation.
    let line = o
        .stderr
        .lines()
        .find(|l| l.contains("reports-a.ledger"))
        .unwrap();
    assert!(
        line.contains("records this program's earlier group reports") && !line.contains("  "),
        "{line}"
    );
    // Two such ledgers: which one to audit against is the user's to say.
    std::fs::create_dir(t.dir.join("reports-z.ledger")).unwrap();
    for f in ["ledger.json", "secret.key"] {
        std::fs::copy(
            t.dir.join("reports-a.ledger").join(f),
            t.dir.join("reports-z.ledger").join(f),
        )
        .unwrap();
    }
    with_out("reports-c");
    let o = run("2026-12-03");
    assert_eq!(o.code, 2, "{o:?}");
    assert!(
        o.stderr.contains("reports-a.ledger") && o.stderr.contains("reports-z.ledger"),
        "{}",
        o.stderr
    );
    assert!(!t.dir.join("reports-c").exists());
    assert!(!t.dir.join("reports-c.ledger").exists());
    // A run that writes no group report records nothing and is not stopped by them.
    let only = ["--only", "SG-003"];
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-03",
        "--formats",
        "html",
        only[0],
        only[1],
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(t.dir.join("reports-c/participants/SG-003.html").is_file());
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-03",
        "--formats",
        "html",
        "--shard",
        "1/2",
    ]);
    assert_eq!(o.code, 0, "{o:?}");
}

/// A cron script writing each release into a folder of its own (`--out srv/2026-08`, then a
/// re-issue `--out srv/2026-08-reissue` after SG-007 withdrew consent and her folder was
/// removed), with no --state and no ledger in the program's own output folder: the re-issue
/// started a new ledger and printed every count that holds her one lower (whole program 50 to
/// 49 enrolled, Kiln Row 23 to 22, reached 5 % 23 to 22): her site and her milestones, and,
/// from the means, her weight change. It is now audited against the first release, through
/// the ledger beside its folder.
#[test]
fn a_release_into_a_fresh_folder_beside_the_last_is_audited_against_it() {
    let t = ProgramTest::sample();
    let srv = t.dir.parent().unwrap().join("srv");
    std::fs::create_dir(&srv).unwrap();
    let run = |out: &str| {
        let out = srv.join(out).to_string_lossy().into_owned();
        let args = [
            "run",
            "{dir}",
            "--period",
            "2026-08",
            "--as-of",
            "2026-09-02",
        ];
        let o = t.run(&[&args[..], &["--formats", "html", "--out", &out]].concat());
        assert_eq!(o.code, 4, "{o:?}"); // the sample's planted errors
        let g: serde_json::Value = serde_json::from_slice(
            &std::fs::read(srv.join(&out).join("metrics/group.json")).unwrap(),
        )
        .unwrap();
        (o, g)
    };
    let (_, first) = run("2026-08");
    let kiln = kiln_row_enrolled;
    assert_eq!(
        first["program"]["stats"]["enrolment"]["enrolled"]["value"],
        50
    );
    assert_eq!(kiln(&first)["value"], 23);
    std::fs::remove_dir_all(t.dir.join("participants/SG-007")).unwrap();
    let (o, second) = run("2026-08-reissue");
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);
    assert!(!srv.join("2026-08-reissue.ledger").exists());
    let enrolled = &second["program"]["stats"]["enrolment"]["enrolled"];
    assert_ne!(enrolled["value"], 49, "{enrolled}");
    assert_ne!(kiln(&second)["value"], 22, "{}", kiln(&second));
    // No exact count of the re-issue is one to ten below the same count in the first.
    let close = counts_one_to_ten_lower(&first, &second);
    assert!(close.is_empty(), "{close:?}");
}

/// Every exact count (`value`, not a percent) of a group.json, by its path.
fn exact_counts(v: &serde_json::Value, path: String, out: &mut Vec<(String, i64)>) {
    match v {
        serde_json::Value::Object(m) => {
            if let Some(n) = m.get("value").and_then(serde_json::Value::as_i64)
                && !path.contains("percent")
            {
                out.push((path.clone(), n));
            }
            for (k, x) in m {
                exact_counts(x, format!("{path}/{k}"), out);
            }
        }
        serde_json::Value::Array(a) => {
            for (i, x) in a.iter().enumerate() {
                exact_counts(x, format!("{path}/{i}"), out);
            }
        }
        _ => {}
    }
}

/// The enrolment and milestone counts `second` prints exactly 1 to 10 below the same count in
/// `first` (two group.json files): each such difference is a small group's figure.
fn counts_one_to_ten_lower(
    first: &serde_json::Value,
    second: &serde_json::Value,
) -> Vec<(String, i64, i64)> {
    let (mut a, mut b) = (Vec::new(), Vec::new());
    exact_counts(first, String::new(), &mut a);
    exact_counts(second, String::new(), &mut b);
    let b: std::collections::BTreeMap<_, _> = b.into_iter().collect();
    a.into_iter()
        .filter(|(p, _)| p.contains("/enrolment/") || p.contains("/milestones/"))
        .filter_map(|(p, n)| b.get(&p).map(|m| (p, n, *m)))
        .filter(|(_, n, m)| (1..=10).contains(&(n - m)))
        .collect()
}

/// Kiln Row's enrolled count in a group.json of the sample program (split by site).
fn kiln_row_enrolled(g: &serde_json::Value) -> serde_json::Value {
    g["splits"][0]["sections"]
        .as_array()
        .unwrap()
        .iter()
        .find(|s| s["label"] == "Kiln Row")
        .unwrap()["stats"]["enrolment"]["enrolled"]
        .clone()
}

/// Output folders in a parent of their own each release (`--out srv/2026-08/reports`, then
/// `--out srv/2026-08-reissue/reports` after SG-007 withdrew consent and her folder was
/// removed), with no --state: no ledger lay beside the second folder, so it started a new
/// one beside itself, and its report was audited against nothing (a warning only): whole
/// program enrolled 50 then 49, Kiln Row 23 then 22. The first run now makes the program's own
/// ledger (`reports.ledger` in the program folder, beside `report.out`) and says so; the
/// second finds it there, whatever `--out` says, and is audited against the first.
#[test]
fn releases_into_folders_of_different_parents_are_audited_against_one_another() {
    let t = ProgramTest::sample();
    let srv = t.dir.parent().unwrap().join("srv");
    let run = |month: &str| {
        let out = srv.join(month).join("reports");
        let out_s = out.to_string_lossy().into_owned();
        let args = [
            "run",
            "{dir}",
            "--period",
            "2026-08",
            "--as-of",
            "2026-09-02",
        ];
        let o = t.run(&[&args[..], &["--formats", "html", "--out", &out_s]].concat());
        assert_eq!(o.code, 4, "{o:?}"); // the sample's planted errors
        let g: serde_json::Value =
            serde_json::from_slice(&std::fs::read(out.join("metrics/group.json")).unwrap())
                .unwrap();
        assert!(
            !srv.join(month).join("reports.ledger").exists(),
            "no ledger beside --out"
        );
        (o, g)
    };
    let programs = t.dir.join("reports.ledger");
    let (o, first) = run("2026-08");
    assert!(programs.join("ledger.json").is_file());
    let line = o
        .stderr
        .lines()
        .find(|l| l.contains("created as this program's own ledger"))
        .unwrap_or_else(|| panic!("{}", o.stderr));
    assert!(
        line.contains(" INFO ") && line.contains(&programs.display().to_string()),
        "{line}"
    );
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);
    assert_eq!(
        first["program"]["stats"]["enrolment"]["enrolled"]["value"],
        50
    );
    assert_eq!(kiln_row_enrolled(&first)["value"], 23);

    std::fs::remove_dir_all(t.dir.join("participants/SG-007")).unwrap();
    let (o, second) = run("2026-08-reissue");
    assert!(
        !o.stderr.contains("a new ledger") && !o.stderr.contains("created as"),
        "{}",
        o.stderr
    );
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(programs.join("ledger.json")).unwrap()).unwrap();
    assert_eq!(ledger["releases"].as_array().unwrap().len(), 2);
    // Against nothing it printed 49 and 22: SG-007's site, milestones and weight change.
    let enrolled = &second["program"]["stats"]["enrolment"]["enrolled"];
    assert_ne!(enrolled["value"], 49, "{enrolled}");
    assert_ne!(
        kiln_row_enrolled(&second)["value"],
        22,
        "{}",
        kiln_row_enrolled(&second)
    );
    let close = counts_one_to_ten_lower(&first, &second);
    assert!(close.is_empty(), "{close:?}");
}

/// The program's own place cannot hold a new ledger: a file in the way, or a program folder on
/// a read-only file system (a share mounted `ro`) with `--out` elsewhere. Each such run used to
/// start a new ledger beside `--out`; it must not fall back to one there, so it stops before
/// any participant is computed (exit 6), naming the folder and saying to give `--state`, and
/// `check` says the same. With `--state`, the run goes ahead. The read-only case needs the
/// right to mount (root, as on the project's test machine) and is skipped without it.
#[test]
fn a_program_whose_own_ledger_cannot_be_made_is_refused_before_anything_is_computed() {
    let t = ProgramTest::fixture("report-small");
    let base = t.dir.parent().unwrap().to_path_buf();
    let out = base.join("srv/2026-11/reports");
    let out_s = out.to_string_lossy().into_owned();
    let refused = |program: &str, at_fault: &std::path::Path| {
        let args = ["--as-of", AS_OF, "--out", &out_s];
        let o = t.run(&[&["run", program, "--formats", "html"][..], &args].concat());
        assert_eq!(o.code, 6, "{o:?}");
        assert!(
            o.stderr
                .contains(&format!("group-report ledger: {}: ", at_fault.display())),
            "{}",
            o.stderr
        );
        assert!(
            o.stderr.contains("--state") && o.stderr.contains("program's own ledger"),
            "{}",
            o.stderr
        );
        // Refused before the participants: the line that starts them is not logged.
        assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
        assert!(!out.exists() && !base.join("srv/2026-11/reports.ledger").exists());
        let c = t.run(&[&["check", program][..], &args].concat());
        assert_eq!(c.code, 6, "check agrees with run: {c:?}");
        assert!(
            c.stdout
                .contains(&format!("{}: group-report ledger: ", at_fault.display()))
                && c.stdout.contains("program's own ledger"),
            "{}",
            c.stdout
        );
        o.stderr
    };
    // A file in the way.
    let in_the_way = t.dir.join("reports.ledger");
    std::fs::write(&in_the_way, "notes\n").unwrap();
    let said = refused("{dir}", &in_the_way);
    assert!(said.contains("is a regular file, not a folder"), "{said}");
    assert_eq!(std::fs::read(&in_the_way).unwrap(), b"notes\n");
    std::fs::remove_file(&in_the_way).unwrap();

    // A read-only program folder.
    let mnt = base.join("mnt");
    std::fs::create_dir(&mnt).unwrap();
    let Some(tmpfs) = crate::harness::Tmpfs::mount(&mnt) else {
        return;
    };
    let program = mnt.join("program");
    crate::harness::copy_tree(&t.dir, &program);
    tmpfs.make_read_only();
    let program_s = program.to_string_lossy().into_owned();
    let said = refused(&program_s, &program);
    assert!(
        said.contains("cannot be written") && said.contains("Read-only file system"),
        "{said}"
    );
    // Named elsewhere, the ledger is made there and the run goes ahead.
    let state = base.join("ledger").to_string_lossy().into_owned();
    let o = t.run(&[
        "run",
        &program_s,
        "--formats",
        "html",
        "--as-of",
        AS_OF,
        "--out",
        &out_s,
        "--state",
        &state,
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(base.join("ledger/ledger.json").is_file());
}

/// `report.out` a full path (`/srv/x/reports`) and a first run with `--out /srv/x`: the
/// program's new ledger, `/srv/x/reports.ledger`, would be made inside that output folder and
/// replaced with it by the run. Refused before anything is written (exit 2), naming both.
#[test]
fn the_programs_new_ledger_is_never_made_inside_the_output_folder() {
    let t = ProgramTest::fixture("report-small");
    let srv = t.dir.parent().unwrap().join("srv/x");
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    let full = srv.join("reports");
    std::fs::write(
        &yaml,
        text.replace(
            "\n  out: reports\n",
            &format!("\n  out: {}\n", full.display()),
        ),
    )
    .unwrap();
    let srv_s = srv.to_string_lossy().into_owned();
    let args = ["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
    let o = t.run(&[&args[..], &["--out", &srv_s]].concat());
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr.contains(&format!(
            "its own ledger {} would be inside this output folder",
            srv.join("reports.ledger").display()
        )) && o.stderr.contains("--state"),
        "{}",
        o.stderr
    );
    assert!(!srv.exists(), "nothing made");
    // Its own output folder is fine: the ledger is made beside it.
    let o = t.run(&args);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(srv.join("reports.ledger/ledger.json").is_file());
}

/// Runs that write no group report (`--only`, a shard) make no ledger anywhere, whatever
/// `--out` says; `merge` of the shards into a folder of another parent makes the program's own,
/// as a whole run does, and a second merge is audited against it.
#[test]
fn only_shards_make_no_ledger_and_merge_makes_the_programs_own() {
    let t = ProgramTest::fixture("report-small");
    let base = t.dir.parent().unwrap().to_path_buf();
    let programs = t.dir.join("reports.ledger");
    let ledgers = || -> Vec<String> {
        walkdir::WalkDir::new(&base)
            .into_iter()
            .filter_map(Result::ok)
            .filter(|e| e.file_name().to_string_lossy().ends_with(".ledger"))
            .map(|e| e.path().display().to_string())
            .collect()
    };
    let at = |rel: &str| base.join(rel).to_string_lossy().into_owned();
    let run = |extra: &[&str]| {
        let args = ["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
        t.run(&[&args[..], extra].concat())
    };
    let o = run(&["--out", &at("a/only"), "--only", "SG-003"]);
    assert_eq!(o.code, 0, "{o:?}");
    for k in 1..=2 {
        let o = run(&[
            "--out",
            &at(&format!("a/shard{k}")),
            "--shard",
            &format!("{k}/2"),
        ]);
        assert_eq!(o.code, 0, "{o:?}");
    }
    assert!(ledgers().is_empty(), "{:?}", ledgers());
    let merge = |out: &str| {
        t.run(&[
            "merge",
            "{dir}",
            "--out",
            &at(out),
            &at("a/shard1"),
            &at("a/shard2"),
        ])
    };
    let m = merge("b/merged");
    assert_eq!(m.code, 0, "{m:?}");
    assert!(
        m.stderr.contains("created as this program's own ledger"),
        "{}",
        m.stderr
    );
    assert_eq!(ledgers(), [programs.display().to_string()]);
    let m = merge("c/merged");
    assert_eq!(m.code, 0, "{m:?}");
    assert!(!m.stderr.contains("created as"), "{}", m.stderr);
    assert_eq!(ledgers(), [programs.display().to_string()]);
}

#[test]
fn a_ledger_json_beside_that_is_a_link_or_a_fifo_is_passed_over_not_followed_or_waited_on() {
    // The other ledgers beside a new one were read with a plain `fs::read`: a `ledger.json`
    // that is a FIFO (anyone who can make a folder beside the output) made every later run
    // wait forever, and one that is a link was followed wherever it led (`/dev/zero`: memory
    // without end). The ledger's own file is never read through a link, nor anything but a
    // regular file; these are not either.
    let t = ProgramTest::fixture("report-small");
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    let with_out = |out: &str| {
        std::fs::write(
            &yaml,
            text.replace("\n  out: reports\n", &format!("\n  out: {out}\n")),
        )
        .unwrap();
    };
    let run = |as_of: &str| t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
    with_out("reports-a");
    assert_eq!(run(AS_OF).code, 0);
    let linked = t.dir.join("linked.ledger");
    std::fs::create_dir(&linked).unwrap();
    std::os::unix::fs::symlink(
        t.dir.join("reports-a.ledger/ledger.json"),
        linked.join("ledger.json"),
    )
    .unwrap();
    with_out("reports-b");
    // Another month, so the ledger records a second release.
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-12-02",
        "--period",
        "2026-08",
        "--formats",
        "html",
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(o.stderr.contains("reports-a.ledger"), "{}", o.stderr);
    assert!(!o.stderr.contains("linked.ledger"), "{}", o.stderr);
    let fifo = t.dir.join("fifo.ledger");
    std::fs::create_dir(&fifo).unwrap();
    let made = std::process::Command::new("mkfifo")
        .arg(fifo.join("ledger.json"))
        .status()
        .unwrap();
    assert!(made.success());
    with_out("reports-c");
    let o = run("2026-12-03");
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        o.stderr.contains("reports-a.ledger") && !o.stderr.contains("fifo.ledger"),
        "{}",
        o.stderr
    );
}

/// The ledger deleted (cleaned away as clutter) while the output folder keeps the group report
/// it recorded: the next run was audited against nothing, and with `--out` naming that folder
/// it said nothing at all. The 80-person demo re-issued for September into the same `--out`
/// after one person left printed "reached 3 % loss" 57 → 56, "reached 5 %" 31 → 31 and "on a
/// plateau" 39 → 38 beside the sponsor's first issue: that person lost between 3 and 5 % and is
/// on a plateau (with the ledger kept, those counts are ranges). Now such a run is refused
/// before anything is computed, unless `--new-ledger` says the restart is meant.
#[test]
fn a_new_ledger_beside_an_earlier_group_report_is_refused_unless_meant() {
    let t = ProgramTest::fixture("report-small");
    let run = |extra: &[&str]| {
        let mut args = vec!["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
        args.extend_from_slice(extra);
        t.run(&args)
    };
    let o = run(&[]);
    assert_eq!(o.code, 0);
    assert!(!o.stderr.contains("a new ledger"), "{}", o.stderr);
    std::fs::remove_dir_all(t.dir.join("reports.ledger")).unwrap();
    let before = tree_hashes(&t.dir.join("reports"));
    let out = t.dir.join("reports").to_string_lossy().into_owned();
    for extra in [&[][..], &["--out", out.as_str()][..]] {
        let o = run(extra);
        assert_eq!(o.code, cohortpress::exit_code::USAGE, "{extra:?}: {o:?}");
        assert!(
            o.stderr
                .contains("holds a group report of this program for ")
                && o.stderr
                    .contains("it records no release: deleted, moved or new")
                && o.stderr.contains("--new-ledger"),
            "{}",
            o.stderr
        );
        // Refused before the participants: the line that starts them is not logged.
        assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
        assert!(!t.dir.join("reports.ledger").exists(), "no ledger made");
        assert_eq!(tree_hashes(&t.dir.join("reports")), before);
    }
    let c = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert!(
        c.stdout.contains("unless given --new-ledger"),
        "check says it too: {c:?}"
    );
    let o = run(&["--new-ledger"]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        o.stderr.contains("a new ledger, but")
            && o.stderr.contains("holds a group report of an earlier run"),
        "{}",
        o.stderr
    );
    // Recorded now: the next run needs nothing.
    assert_eq!(run(&[]).code, 0);
}

/// `--state` naming a new ledger while the program's own records its group reports: the run
/// into a new output folder was audited against nothing, with a warning only.
#[test]
fn a_new_ledger_named_while_another_records_the_program_is_refused_unless_meant() {
    let t = ProgramTest::fixture("report-small");
    let run = |extra: &[&str]| {
        let mut args = vec!["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
        args.extend_from_slice(extra);
        t.run(&args)
    };
    assert_eq!(run(&[]).code, 0);
    let fresh = t.dir.parent().unwrap().join("fresh");
    let (fresh_s, out) = (
        fresh.to_string_lossy().into_owned(),
        t.dir
            .parent()
            .unwrap()
            .join("elsewhere")
            .to_string_lossy()
            .into_owned(),
    );
    let o = run(&["--state", &fresh_s, "--out", &out]);
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr.contains(&format!(
            "{}: records its earlier ones",
            t.dir.join("reports.ledger").display()
        )) || o.stderr.contains(&format!(
            "while {} records its earlier ones",
            t.dir.join("reports.ledger").display()
        )),
        "{}",
        o.stderr
    );
    assert!(!fresh.exists() && !std::path::Path::new(&out).exists());
    // The program's own ledger named: used as every run uses it.
    let own = t.dir.join("reports.ledger").to_string_lossy().into_owned();
    assert_eq!(run(&["--state", &own, "--out", &out]).code, 0);
    let o = run(&["--state", &fresh_s, "--out", &out, "--new-ledger"]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(o.stderr.contains("a new ledger"), "{}", o.stderr);
}

/// `report.out` moved to a folder of another parent between months: the program's "own" ledger
/// is beside `report.out`, so the run made a new one there (an INFO line) and audited the
/// report against nothing, while `reports.ledger` in the program folder recorded every
/// earlier release (the 80-person demo, one person gone: "reached 3 % loss" 57 → 56).
#[test]
fn a_new_own_ledger_after_report_out_moved_is_refused_unless_meant() {
    let t = ProgramTest::fixture("report-small");
    let run = |extra: &[&str]| {
        let mut args = vec!["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
        args.extend_from_slice(extra);
        t.run(&args)
    };
    assert_eq!(run(&[]).code, 0);
    let moved = t.dir.parent().unwrap().join("srv").join("reports");
    let path = t.dir.join("program.yaml");
    let yaml = std::fs::read_to_string(&path).unwrap();
    let out_line = yaml
        .lines()
        .find(|l| l.trim_start().starts_with("out:"))
        .map(str::to_string);
    let yaml = match out_line {
        Some(l) => yaml.replace(&l, &format!("  out: {}", moved.display())),
        None => yaml.replace(
            "report:\n",
            &format!("report:\n  out: {}\n", moved.display()),
        ),
    };
    std::fs::write(&path, yaml).unwrap();
    let o = run(&[]);
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr.contains(&format!(
            "while {} records its earlier ones",
            t.dir.join("reports.ledger").display()
        )),
        "{}",
        o.stderr
    );
    assert!(!moved.exists() && !moved.with_extension("ledger").exists());
    let o = run(&["--new-ledger"]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(moved.with_extension("ledger").join("ledger.json").is_file());
}

/// The ledger restored from an older backup than the output folder (or another copy of it):
/// the group report in the output folder is not recorded in it, so the next report was not
/// audited against it, with no word.
#[test]
fn a_ledger_that_does_not_record_the_outputs_group_report_is_refused_unless_meant() {
    let t = ProgramTest::fixture("report-small");
    let run = |period: &str| {
        t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--period",
            period,
        ])
    };
    let says = "which the ledger does not record";
    let o = run("2026-09");
    assert_eq!(o.code, 0, "{o:?}");
    let ledger = t.dir.join("reports.ledger/ledger.json");
    let backup = std::fs::read(&ledger).unwrap();
    let o = run("2026-08");
    assert_eq!(o.code, 0, "{o:?}");
    assert!(!o.stderr.contains(says), "{}", o.stderr);
    // The September-only copy comes back; the output holds August's group report. Refused
    // (exit 2), unless --new-ledger says it is meant; then said as a warning.
    std::fs::write(&ledger, &backup).unwrap();
    let o = run("2026-09");
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr.contains("(an older or another copy?)"),
        "{}",
        o.stderr
    );
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--period",
        "2026-09",
        "--new-ledger",
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        o.stderr
            .contains("holds a group report of this program for 2026-08-01 to 2026-08-31"),
        "{}",
        o.stderr
    );
    assert!(o.stderr.contains(says), "{}", o.stderr);
    // Now recorded: the output holds September's report, which the ledger has.
    let o = run("2026-09");
    assert!(!o.stderr.contains(says), "{}", o.stderr);
    // A ledger emptied by hand (its key kept) is the same case.
    let mut v: serde_json::Value =
        serde_json::from_slice(&std::fs::read(&ledger).unwrap()).unwrap();
    v["releases"] = serde_json::json!([]);
    std::fs::write(&ledger, v.to_string()).unwrap();
    let o = run("2026-09");
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr
            .contains("holds a group report of this program for 2026-09-01 to 2026-09-30"),
        "{}",
        o.stderr
    );
}

/// `--state` naming a file (a typo, the program file) or a folder of someone else's: every
/// participant was computed first, and the run then failed with "File exists (os error 17)".
/// Now the run is refused when it starts, saying what is wrong (exit 6 as before).
#[test]
fn a_ledger_folder_that_cannot_be_used_stops_the_run_before_anything_is_computed() {
    let t = ProgramTest::fixture("report-small");
    let file = t.dir.join("program.yaml");
    let before = std::fs::read(&file).unwrap();
    let run = |state: &str| {
        t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--state",
            state,
        ])
    };
    let o = run(&file.to_string_lossy());
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr.contains(
            "program.yaml: is a regular file, not a folder; the ledger needs a folder of its own"
        ),
        "{}",
        o.stderr
    );
    // Refused before the participants: the line that starts them is not logged.
    assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
    assert_eq!(std::fs::read(&file).unwrap(), before);
    assert!(!t.dir.join("reports").exists());
    // A ledger.json that does not read (cut short when a disk filled) is found then too.
    let cut = t.dir.parent().unwrap().join("cut");
    std::fs::create_dir(&cut).unwrap();
    std::fs::write(
        cut.join("ledger.json"),
        "{\"format\":1,\"releases\":[{\"pro",
    )
    .unwrap();
    let o = run(&cut.to_string_lossy());
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr.contains("ledger.json: EOF while parsing"),
        "{}",
        o.stderr
    );
    assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
}

/// A ledger folder on a file system mounted read-only (a restored backup, a share mounted
/// `ro`, a disk the kernel turned read-only after errors): `check` said the program was fine,
/// and every run computed every participant and only then failed at the ledger's lock file
/// with "Read-only file system (os error 30)". Now both refuse it at once. Needs the right to
/// mount (root, as on the project's test machine); skipped with a message without it.
#[cfg(unix)]
#[test]
fn a_ledger_folder_that_cannot_be_written_is_refused_before_anything_is_computed() {
    let t = ProgramTest::fixture("report-small");
    let mnt = t.dir.parent().unwrap().join("mnt");
    std::fs::create_dir(&mnt).unwrap();
    let Some(tmpfs) = crate::harness::Tmpfs::mount(&mnt) else {
        return;
    };
    let state = mnt.join("ledger");
    let state_s = state.to_string_lossy().into_owned();
    let fresh = mnt.join("fresh");
    let fresh_s = fresh.to_string_lossy().into_owned();
    let run = |state: &str| {
        t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--state",
            state,
        ])
    };
    let o = run(&state_s);
    assert_eq!(o.code, 0, "{o:?}");
    tmpfs.make_read_only();
    let before = tree_hashes(&t.dir.join("reports"));
    for (state, shown) in [(&state_s, state.clone()), (&fresh_s, mnt.clone())] {
        let o = run(state);
        assert_eq!(o.code, 6, "{o:?}");
        assert!(
            o.stderr
                .contains(&format!("{}: cannot be written", shown.display()))
                && o.stderr.contains("Read-only file system"),
            "{}",
            o.stderr
        );
        // Refused before the participants: the line that starts them is not logged.
        assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
        let c = t.run(&["check", "{dir}", "--as-of", AS_OF, "--state", state]);
        assert_eq!(c.code, 6, "check agrees with run: {c:?}");
        assert!(c.stdout.contains("cannot be written"), "{c:?}");
    }
    assert_eq!(tree_hashes(&t.dir.join("reports")), before);
}

#[test]
fn the_ledger_needs_a_folder_of_its_own() {
    let t = ProgramTest::fixture("report-small");
    // `--state` naming a folder of other things (the home folder, say): the ledger's files
    // were created among them, and a `ledger.json` of someone else's was read as ours.
    let home = t.dir.parent().unwrap().join("home");
    std::fs::create_dir(&home).unwrap();
    std::fs::write(home.join("notes.txt"), "mine\n").unwrap();
    let home_s = home.to_string_lossy().into_owned();
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--state",
        &home_s,
    ]);
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr.contains(
            "holds `notes.txt` besides a ledger's files; the ledger needs a folder of its own"
        ),
        "{}",
        o.stderr
    );
    let mut names: Vec<String> = std::fs::read_dir(&home)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["notes.txt"], "nothing was added");
    assert!(!t.dir.join("reports").exists(), "nothing was published");
}

#[test]
fn an_output_folder_inside_the_ledger_folder_is_refused_before_anything_is_written() {
    // `--out reports.ledger/x`: the run staged its output in the program's ledger folder and
    // failed there; the lock file it left made every later run refuse the ledger (exit 6).
    let t = ProgramTest::fixture("report-small");
    let o = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(o.code, 0, "{o:?}");
    let ledger = t.dir.join("reports.ledger");
    let before = tree_hashes(&ledger);
    let inside = ledger.join("x");
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        inside.to_str().unwrap(),
    ]);
    assert_eq!(o.code, cohortpress::exit_code::USAGE, "{o:?}");
    assert!(
        o.stderr
            .contains("would be inside the program's ledger folder"),
        "{}",
        o.stderr
    );
    assert_eq!(
        tree_hashes(&ledger),
        before,
        "nothing written in the ledger"
    );
    let names: Vec<String> = std::fs::read_dir(&ledger)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(!names.iter().any(|n| n.starts_with(".x")), "{names:?}");
    // The program's next run is not locked out.
    let o = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(o.code, 0, "{o:?}");
}

/// `ledger.json` and `secret.key` were read following links and from anything: a FIFO under
/// either name made a cron run wait for ever, a link to `/dev/zero` read until memory ran
/// out, and a link to another program's ledger was used as this one's. They are read like
/// inputs now: a link or a special file stops the run (exit 6) with the previous output kept.
#[cfg(unix)]
#[test]
fn ledger_files_are_never_read_through_a_link() {
    let t = ProgramTest::fixture("report-small");
    let run = |as_of: &str| t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
    assert_eq!(run(AS_OF).code, 0);
    let out = t.dir.join("reports");
    let before = tree_hashes(&out);
    let ledger = t.dir.join("reports.ledger");
    let elsewhere = t.dir.parent().unwrap().join("elsewhere");
    std::fs::create_dir(&elsewhere).unwrap();
    for name in ["ledger.json", "secret.key"] {
        std::fs::rename(ledger.join(name), elsewhere.join(name)).unwrap();
        std::os::unix::fs::symlink(elsewhere.join(name), ledger.join(name)).unwrap();
        let o = run("2026-12-02");
        assert_eq!(o.code, 6, "{name}: {o:?}");
        assert!(o.stderr.contains(name), "{}", o.stderr);
        assert!(o.stderr.contains("symbolic link"), "{}", o.stderr);
        assert_eq!(tree_hashes(&out), before, "the previous output is kept");
        std::fs::remove_file(ledger.join(name)).unwrap();
        std::fs::rename(elsewhere.join(name), ledger.join(name)).unwrap();
    }
    assert_eq!(run("2026-12-02").code, 0);
}

/// `cd` into the output folder and `--out .` (a cron script that changes folder first): the
/// default ledger, named after the output folder, was `./reports.ledger`, inside the output
/// folder itself. The run recorded its release there, found the output folder changed at the
/// swap (exit 6), and every later run refused the folder for the ledger it now held. A new
/// ledger is now the program's own; a ledger the output folder already has (made by an
/// earlier version, beside it) is found beside the folder, as for any other name.
#[test]
fn out_dot_puts_the_ledger_beside_the_output_folder_not_inside_it() {
    let t = ProgramTest::fixture("report-small");
    let base = t.dir.parent().unwrap();
    let out = base.join("monthly");
    std::fs::create_dir(&out).unwrap();
    let run = || {
        std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
            .args(["run", &t.dir.to_string_lossy(), "--as-of", AS_OF])
            .args(["--formats", "html", "--out", "."])
            .current_dir(&out)
            .env_clear()
            .env("PATH", std::env::var("PATH").unwrap_or_default())
            .env("HOME", base)
            .output()
            .unwrap()
    };
    let o = run();
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    assert!(out.join("manifest.json").is_file());
    assert!(!out.join("reports.ledger").exists());
    assert!(!out.join("monthly.ledger").exists());
    let programs = t.dir.join("reports.ledger");
    assert!(programs.join("ledger.json").is_file());
    // And the next month's run goes ahead the same way.
    let o = run();
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    // The output folder's own ledger, beside it (as an earlier version made it), is found
    // under `--out .` and used; nothing is made inside the output folder.
    std::fs::rename(&programs, base.join("monthly.ledger")).unwrap();
    let o = run();
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    assert!(!programs.exists(), "{o:?}");
    assert!(!out.join("reports.ledger").exists());
    assert!(!out.join("monthly.ledger").exists());
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(base.join("monthly.ledger/ledger.json")).unwrap())
            .unwrap();
    assert_eq!(ledger["releases"].as_array().unwrap().len(), 1);
}

/// `check` passed a program whose ledger folder `run` then refused (exit 6, after the user had
/// been told the program was fine). It now finds the ledger folder as a run does (the default
/// beside `report.out`, `report.state_dir`, or `--state` given to both) and reports the same
/// problem, naming the file, with the run's exit code; nothing is created or changed.
#[test]
fn check_reports_a_ledger_folder_that_run_would_refuse() {
    let t = ProgramTest::fixture("report-small");
    let check =
        |extra: &[&str]| t.run(&[&["check", "{dir}", "--as-of", AS_OF][..], extra].concat());
    let run = |extra: &[&str]| {
        t.run(
            &[
                &["run", "{dir}", "--as-of", AS_OF, "--formats", "html"][..],
                extra,
            ]
            .concat(),
        )
    };
    let clean = check(&[]).code;
    assert!(clean < 2, "the fixture checks clean (or with warnings)");

    // The default place, beside report.out, holding someone's notes.
    let ledger = t.dir.join("reports.ledger");
    std::fs::create_dir(&ledger).unwrap();
    std::fs::write(ledger.join("notes.txt"), "mine\n").unwrap();
    let why = "holds `notes.txt` besides a ledger's files; the ledger needs a folder of its own";
    let before = tree_hashes(&t.dir);
    let c = check(&[]);
    assert_eq!(c.code, 6, "{c:?}");
    assert!(
        c.stdout.contains(&format!(
            "error: {}: group-report ledger: {why}",
            ledger.display()
        )),
        "{}",
        c.stdout
    );
    let j = check(&["--format", "json"]);
    assert_eq!(j.code, 6, "{j:?}");
    let line: serde_json::Value = j
        .stdout
        .lines()
        .map(|l| serde_json::from_str::<serde_json::Value>(l).unwrap())
        .find(|v| {
            v["message"]
                .as_str()
                .unwrap_or("")
                .contains("group-report ledger")
        })
        .expect("a JSON line for the ledger");
    assert_eq!(line["severity"], "error");
    assert_eq!(line["file"], ledger.to_string_lossy().as_ref());
    assert_eq!(tree_hashes(&t.dir), before, "check changed nothing");
    let r = run(&[]);
    assert_eq!(r.code, 6, "{r:?}");
    assert!(
        r.stderr
            .contains(&format!("group-report ledger: {}: {why}", ledger.display())),
        "{}",
        r.stderr
    );
    std::fs::remove_file(ledger.join("notes.txt")).unwrap();
    assert_eq!(check(&[]).code, clean, "an empty folder is the ledger's");

    // report.state_dir naming a file.
    std::fs::write(t.dir.join("kept"), "a file\n").unwrap();
    set_state_dir(&t, "kept");
    let why = "is a regular file, not a folder; the ledger needs a folder of its own";
    let c = check(&[]);
    assert_eq!(c.code, 6, "{c:?}");
    assert!(
        c.stdout.contains("kept: group-report ledger: "),
        "{}",
        c.stdout
    );
    assert!(c.stdout.contains(why), "{}", c.stdout);
    assert_eq!(run(&[]).code, 6);

    // `--state` given to both, holding a ledger.json cut short: the file itself is named.
    let cut = t.dir.parent().unwrap().join("cut");
    std::fs::create_dir(&cut).unwrap();
    std::fs::write(
        cut.join("ledger.json"),
        "{\"format\":1,\"releases\":[{\"pro",
    )
    .unwrap();
    let state = cut.to_string_lossy().into_owned();
    let c = check(&["--state", &state]);
    assert_eq!(c.code, 6, "{c:?}");
    assert!(
        c.stdout.contains(&format!(
            "error: {}: group-report ledger: EOF while parsing",
            cut.join("ledger.json").display()
        )),
        "{}",
        c.stdout
    );
    let r = run(&["--state", &state]);
    assert_eq!(r.code, 6, "{r:?}");
    assert!(
        r.stderr.contains("ledger.json: EOF while parsing"),
        "{}",
        r.stderr
    );
    // A `--state` `run` refuses as a wrong command line is one for `check` too.
    let c = check(&["--state", "participants/x"]);
    assert_eq!(c.code, 2, "{c:?}");
    assert!(c.stdout.contains("inside participants/"), "{}", c.stdout);
    assert_eq!(run(&["--state", "participants/x"]).code, 2);
    assert!(!t.dir.join("participants/x").exists());
}

#[test]
fn check_with_out_judges_the_ledger_a_run_into_that_folder_uses() {
    // A program without a ledger of its own, run into another folder that has one (beside it):
    // the run's ledger is that one, which `check` (looking beside `report.out`) never saw.
    // (A folder there without a `ledger.json` is not a ledger: the run makes the program's own.)
    let t = ProgramTest::fixture("report-small");
    let elsewhere = t.dir.parent().unwrap().join("monthly");
    let ledger = t.dir.parent().unwrap().join("monthly.ledger");
    std::fs::create_dir(&ledger).unwrap();
    std::fs::write(ledger.join("ledger.json"), "{\"format\":1,\"releases\":[]}").unwrap();
    std::fs::write(ledger.join("notes.txt"), "mine\n").unwrap();
    let out = elsewhere.to_string_lossy().into_owned();
    let check =
        |extra: &[&str]| t.run(&[&["check", "{dir}", "--as-of", AS_OF][..], extra].concat());
    assert!(
        check(&[]).code < 2,
        "without --out the folder is not the run's"
    );
    let c = check(&["--out", &out]);
    assert_eq!(c.code, 6, "{c:?}");
    assert!(
        c.stdout.contains(&format!(
            "error: {}: group-report ledger: ",
            ledger.display()
        )),
        "{}",
        c.stdout
    );
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        &out,
    ]);
    assert_eq!(r.code, 6, "{r:?}");
    // `~` is refused for `--out` as `run` refuses it.
    assert_eq!(check(&["--out", "~/reports"]).code, 2);
    // The folder itself is judged as `run` judges it: `check --out` a program's participants/
    // or a folder of someone else's said nothing (exit 0), where `run` refused with exit 2.
    let mine = t.dir.parent().unwrap().join("documents");
    std::fs::create_dir(&mine).unwrap();
    std::fs::write(mine.join("letter.txt"), "mine\n").unwrap();
    for dir in [
        t.dir.join("participants").to_string_lossy().into_owned(),
        mine.to_string_lossy().into_owned(),
    ] {
        let c = check(&["--out", &dir]);
        let r = t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--out",
            &dir,
        ]);
        assert_eq!((c.code, r.code), (2, 2), "{c:?}\n{r:?}");
        assert!(
            c.stdout.contains(&format!(
                "error: command line: refusing to write the output to {dir}"
            )),
            "{}",
            c.stdout
        );
    }
    // With --out, program.yaml's own report.out is not the run's folder and is not judged.
    std::fs::create_dir_all(t.dir.join("reports")).unwrap();
    std::fs::write(t.dir.join("reports/letter.txt"), "mine\n").unwrap();
    assert_eq!(check(&[]).code, 3);
    assert!(check(&["--out", &out]).code != 3);
}

/// A month re-issued after an earlier one with one participant's folder broken (10 people,
/// `min_cell_size: 3`): the counts are hidden against the earlier release. The sponsor's notes
/// said "Shown only as a range" for counts printed "not shown (privacy)", and named four of
/// them "with adherence measure 1" to "4", which no reader could place. (With 4 people the
/// earlier month now prints no count at all: its three hidden histogram bands, each at least
/// 1 since zeros are shown, held 4 together, so each was 1 or 2.)
#[test]
fn the_audit_notes_name_each_hidden_count_as_the_report_shows_it() {
    let t = ProgramTest::demo(10);
    let yaml_path = t.dir.join("program.yaml");
    let yaml = std::fs::read_to_string(&yaml_path).unwrap();
    std::fs::write(
        &yaml_path,
        yaml.replace("min_cell_size: 11", "min_cell_size: 3"),
    )
    .unwrap();
    let run = |period: &str, as_of: &str| {
        t.run(&[
            "run",
            "{dir}",
            "--period",
            period,
            "--as-of",
            as_of,
            "--out",
            &format!("out-{period}"),
            "--state",
            "ledger",
            "--formats",
            "html",
        ])
    };
    assert_eq!(run("2026-08", "2026-09-02").code, 1);
    let profile = t.dir.join("participants/SG-004/profile.yaml");
    let mut text = std::fs::read_to_string(&profile).unwrap();
    text.push_str("sex: [\n");
    std::fs::write(&profile, text).unwrap();
    let o = run("2026-09", "2026-10-02");
    assert_eq!(o.code, 4, "{o:?}");
    let g: serde_json::Value = serde_json::from_str(
        &std::fs::read_to_string(t.dir.join("out-2026-09/metrics/group.json")).unwrap(),
    )
    .unwrap();
    let enrolment = &g["program"]["stats"]["enrolment"];
    let adherence = &g["program"]["stats"]["adherence"];
    let shown_as = |figure: &str| -> Option<&serde_json::Value> {
        match figure {
            "enrolled" | "active" | "started" => Some(&enrolment[figure]),
            "with a recent weigh-in" => Some(&enrolment["with_outcome"]),
            "the n of activity minutes per week" => {
                Some(&adherence["activity_minutes_per_week"]["n"])
            }
            "the n of days with a weigh-in per week" => Some(&adherence["weigh_ins_per_week"]["n"]),
            _ => None,
        }
    };
    let notes = g["audit"].as_array().unwrap();
    assert!(!notes.is_empty(), "{g}");
    let mut checked = 0;
    for note in notes {
        let figure = note["figure"].as_str().unwrap();
        let rule = note["rule"].as_str().unwrap();
        assert!(
            !figure.contains("adherence measure"),
            "a figure the report does not name: {note}"
        );
        if let Some(cell) = shown_as(figure) {
            let ranged = cell.get("at_least").is_some();
            assert_eq!(
                rule.starts_with("Shown only as a range"),
                ranged,
                "{figure} is {cell}, and its note says: {rule}"
            );
            checked += 1;
        }
    }
    assert!(checked >= 3, "{notes:?}");
    // The page's footer states the rule in numbers a reader can take in: it read "no count
    // from 1 to 3 − 1 is printed exactly".
    let html = std::fs::read_to_string(t.dir.join("out-2026-09/group/program.html")).unwrap();
    assert!(
        html.contains("no count above 0 and below 3 is printed exactly"),
        "the footer's rule"
    );
    assert!(!html.contains("3 − 1"));
}

/// The same month run again with the same inputs and as-of date (a cron job retried, the line
/// started by hand) publishes the group report it published before, and the ledger keeps one
/// release of it. Before, the re-run was audited against the first release of the very same
/// figures, and that audit hid more: on an 80-person demo program the re-run's "Mean weight
/// change by week" lost week 22 (`11–79 −4.6 %` became "not shown (privacy)"), the sponsor got
/// a second, different report for the month, and the ledger a second release.
#[test]
fn a_month_run_again_on_the_same_inputs_publishes_the_same_group_report() {
    let t = ProgramTest::demo(80);
    let run = |out: &str| {
        let out = t.dir.parent().unwrap().join(out);
        let out_s = out.to_string_lossy().into_owned();
        let o = t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--out",
            &out_s,
        ]);
        assert!(o.code <= 1, "{o:?}");
        (
            std::fs::read_to_string(out.join("group/program.html")).unwrap(),
            std::fs::read_to_string(out.join("metrics/group.json")).unwrap(),
        )
    };
    let first = run("first");
    let again = run("again");
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(t.dir.join("reports.ledger/ledger.json")).unwrap())
            .unwrap();
    assert_eq!(
        ledger["releases"].as_array().unwrap().len(),
        1,
        "one release of the month"
    );
    assert!(
        first.1 == again.1,
        "group.json differs between the two runs"
    );
    assert!(
        first.0 == again.0,
        "the group report differs between the two runs"
    );
}

/// Which ledger a run without `--state` uses when stray ones lie about (docs/GUIDE.md, "Across
/// releases"): the program's own first, else the output folder's own (`<out>.ledger`), else the
/// one beside the output folder that records this program. A preview run of an older version
/// left `preview.ledger` (and a second stray, `old.ledger`) beside the program's own
/// `reports.ledger`: the program's own still wins, for a run into `reports` and for one into
/// `preview` (whose own name the stray has), and neither stray stops the run as "two ledgers
/// beside"; without the program's own, `preview.ledger` is the preview run's; without either,
/// the one left beside is used, with a line saying so.
#[test]
fn stray_ledgers_beside_never_outrank_the_programs_own_or_the_output_folders() {
    let t = ProgramTest::fixture("report-small");
    let releases = |ledger: &str| -> usize {
        let path = t.dir.join(ledger).join("ledger.json");
        let v: serde_json::Value = serde_json::from_slice(&std::fs::read(path).unwrap()).unwrap();
        v["releases"].as_array().unwrap().len()
    };
    // Each run reports another month, so each records a release (the same month run again on
    // another day is the same release and records nothing).
    let run = |period: Option<&str>, out: Option<&str>| {
        let mut args = vec!["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
        if let Some(p) = period {
            args.extend(["--period", p]);
        }
        if let Some(o) = out {
            args.extend(["--out", o]);
        }
        t.run(&args)
    };
    let o = run(None, None);
    assert_eq!(o.code, 0, "{o:?}");
    assert_eq!(releases("reports.ledger"), 1);
    // Two strays beside, each recording this program (copies of its ledger).
    for stray in ["preview.ledger", "old.ledger"] {
        std::fs::create_dir(t.dir.join(stray)).unwrap();
        for f in ["ledger.json", "secret.key"] {
            std::fs::copy(
                t.dir.join("reports.ledger").join(f),
                t.dir.join(stray).join(f),
            )
            .unwrap();
        }
    }
    // The program's own wins, whatever --out says.
    let o = run(Some("2026-08"), None);
    assert_eq!(o.code, 0, "{o:?}");
    let o = run(Some("2026-07"), Some("{dir}/preview"));
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        !o.stderr.contains(".ledger"),
        "no ledger named: {}",
        o.stderr
    );
    assert_eq!(
        (
            releases("reports.ledger"),
            releases("preview.ledger"),
            releases("old.ledger")
        ),
        (3, 1, 1)
    );
    // Without the program's own: the output folder's own, not stopped by `old.ledger` beside it.
    let kept = t.dir.parent().unwrap().join("kept.ledger");
    std::fs::rename(t.dir.join("reports.ledger"), &kept).unwrap();
    // (The preview's July report, which the ledger moved away recorded, cleared first: beside
    // it a ledger that does not record it is refused.)
    std::fs::remove_dir_all(t.dir.join("preview")).unwrap();
    let o = run(Some("2026-06"), Some("{dir}/preview"));
    assert_eq!(o.code, 0, "{o:?}");
    assert_eq!((releases("preview.ledger"), releases("old.ledger")), (2, 1));
    // Without either: the one beside, said in the log.
    std::fs::remove_dir_all(t.dir.join("preview.ledger")).unwrap();
    std::fs::remove_dir_all(t.dir.join("preview")).unwrap();
    let o = run(Some("2026-05"), Some("{dir}/preview"));
    assert_eq!(o.code, 0, "{o:?}");
    assert_eq!(releases("old.ledger"), 2);
    assert!(
        o.stderr.contains(&format!(
            "group-report ledger {}: used for this report",
            t.dir.join("old.ledger").display()
        )),
        "{}",
        o.stderr
    );
    assert!(!t.dir.join("reports.ledger").exists() && !t.dir.join("preview.ledger").exists());
}

/// A month run again after a file was fixed, where the fix changes no count's people and no
/// mean's values but does change a printed figure (an adherence median), is a new report: it
/// is not taken as the one published before, and the ledger records it. Before, the re-run
/// was matched to the first release on headline, counts and sums alone: the 80-person demo's
/// September, with 40 people's September activity minutes tripled, printed the program's
/// activity median '120 (69)' where the first report printed '80 (69)', and the ledger kept
/// one release, as if the sponsor had been sent the same report twice.
#[test]
fn a_month_run_again_with_a_changed_printed_figure_is_a_new_release() {
    let t = ProgramTest::demo(80);
    let run = || {
        let o = t.run(&[
            "run",
            "{dir}",
            "--period",
            "2026-09",
            "--as-of",
            "2026-10-01",
            "--formats",
            "html",
        ]);
        assert!(o.code <= 1, "{o:?}");
        std::fs::read_to_string(t.dir.join("reports/group/program.html")).unwrap()
    };
    let first = run();
    triple_september_activity(&t, 40);
    let again = run();
    assert_ne!(first, again, "the fix changes a printed figure");
    let ledger: serde_json::Value =
        serde_json::from_slice(&std::fs::read(t.dir.join("reports.ledger/ledger.json")).unwrap())
            .unwrap();
    assert_eq!(
        ledger["releases"].as_array().unwrap().len(),
        2,
        "the second, different report is recorded"
    );
}

/// The adherence medians across monthly releases (the sample program, May to September, one
/// ledger): a median that moved from one printed before with fewer than min people's values is
/// withheld (Harbour Depot's attendance median in June: of its 14 people, fewer than 11 had
/// another attendance than in May; it was printed as 70 % beside May's), and one over exactly the
/// values of one printed before is printed again (September's whole-program attendance median is
/// August's: no session was held in September; it was withheld when August's sites had been).
#[test]
fn adherence_medians_are_audited_across_monthly_releases() {
    let t = ProgramTest::sample();
    let mut months = Vec::new();
    for m in ["05", "06", "07", "08", "09"] {
        let period = format!("2026-{m}");
        let o = t.run(&[
            "run",
            "{dir}",
            "--period",
            &period,
            "--as-of",
            "2026-10-05",
            "--formats",
            "html",
        ]);
        assert!(o.code <= 4, "{o:?}");
        let g: serde_json::Value = serde_json::from_slice(
            &std::fs::read(t.dir.join("reports/metrics/group.json")).unwrap(),
        )
        .unwrap();
        months.push(g);
    }
    let attendance = |g: &serde_json::Value, label: &str| {
        let section = if label == "Whole program" {
            &g["program"]
        } else {
            g["splits"][0]["sections"]
                .as_array()
                .unwrap()
                .iter()
                .find(|s| s["label"] == label)
                .unwrap()
        };
        section["stats"]["adherence"]["attendance_to_date_percent"]["median"].clone()
    };
    let (may, june, august, september) = (&months[0], &months[1], &months[3], &months[4]);
    assert!(attendance(may, "Harbour Depot").get("value").is_some());
    assert_eq!(
        attendance(june, "Harbour Depot"),
        serde_json::json!({"suppressed": true})
    );
    let notes = june["audit"].to_string();
    assert!(
        notes.contains("Harbour Depot") && notes.contains("median session attendance"),
        "{notes}"
    );
    let program = attendance(august, "Whole program");
    assert!(program.get("value").is_some(), "{program}");
    assert_eq!(attendance(september, "Whole program"), program);
}

/// A consent withdrawal recorded in a profile months after its day: June's and July's reports
/// were released with the person still in the program, and no run said so (only `check` listed
/// the rows after the withdrawal; a later month's run left them out silently). Now the first
/// run after it is recorded names the folder, the day, the months released without it and
/// what to do, once: its release records the withdrawals it knew, and the next run is silent.
/// A withdrawal recorded in time (known to every release after its day) is never named.
#[test]
fn a_withdrawal_recorded_after_months_were_released_is_said_once() {
    let t = ProgramTest::fixture("report-small");
    let run = |month: &str, as_of: &str| {
        let o = t.run(&[
            "run", "{dir}", "--period", month, "--as-of", as_of, "--out", month,
        ]);
        assert!(o.code <= 1, "{o:?}");
        o.stderr
    };
    let said = |log: &str| {
        log.lines()
            .filter(|l| l.contains("consent withdrawn on"))
            .map(str::to_string)
            .collect::<Vec<_>>()
    };
    assert!(said(&run("2026-06", "2026-07-02")).is_empty());
    assert!(said(&run("2026-07", "2026-08-02")).is_empty());
    let profile = |id: &str| t.dir.join(format!("participants/{id}/profile.yaml"));
    let add = |id: &str, line: &str| {
        let text = std::fs::read_to_string(profile(id)).unwrap();
        std::fs::write(profile(id), format!("{text}{line}\n")).unwrap();
    };
    add("SG-007", "withdrew: 2026-06-10");
    let log = run("2026-08", "2026-09-02");
    let lines = said(&log);
    assert_eq!(lines.len(), 1, "{log}");
    assert!(
        lines[0].contains(
            "participants/SG-007: consent withdrawn on 2026-06-10 (profile.yaml's `withdrew`), recorded after the reports of 2026-06-01 to 2026-06-30, 2026-07-01 to 2026-07-31 were released"
        ),
        "{}",
        lines[0]
    );
    assert!(lines[0].contains("What to do: tell whoever received those reports"));
    assert!(lines[0].contains(" WARN "), "{}", lines[0]);
    // Said once: September's run knows that August's release knew it. A withdrawal on a day
    // after every period released so far, recorded before the next run, is known in time and
    // never named.
    add("SG-003", "withdrew: 2026-09-05");
    assert!(said(&run("2026-09", "2026-10-02")).is_empty());
    assert!(said(&run("2026-09", "2026-10-02")).is_empty());
    // The ledger names no one: only keyed hashes of the withdrawals each release knew.
    let ledger = std::fs::read_to_string(t.dir.join("reports.ledger/ledger.json")).unwrap();
    assert!(!ledger.contains("SG-007") && !ledger.contains("2026-06-10"));
    let v: serde_json::Value = serde_json::from_str(&ledger).unwrap();
    let known: Vec<usize> = v["releases"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["withdrawals"].as_array().unwrap().len())
        .collect();
    // June's release knew of none (SG-018's withdrawal on 27 July came after its period), July's
    // of SG-018's, August's of SG-007's too, September's of SG-003's as well.
    assert_eq!(known, [0, 1, 2, 3], "{known:?}");
    // Made again without the data, June does not bring the warning back; nor does May, a
    // period before the withdrawal.
    assert!(said(&run("2026-06", "2026-10-04")).is_empty());
    assert!(said(&run("2026-05", "2026-10-04")).is_empty());
}

/// After the program's end every monthly run (cron, no `--period`) reports its last month
/// again with a new as-of date. The figures are the same, yet each run added a copy of the
/// release to the ledger (about 775 kB at 300 people, every month). A changed figure is still
/// a new release.
#[test]
fn the_same_month_run_on_another_day_records_no_second_release() {
    let t = ProgramTest::demo(80);
    let run = |as_of: &str| {
        let o = t.run(&["run", "{dir}", "--as-of", as_of, "--formats", "html"]);
        assert!(o.code <= 1, "{o:?}");
    };
    let releases = || {
        let ledger: serde_json::Value = serde_json::from_slice(
            &std::fs::read(t.dir.join("reports.ledger/ledger.json")).unwrap(),
        )
        .unwrap();
        ledger["releases"]
            .as_array()
            .unwrap()
            .iter()
            .map(|r| {
                let text = |k: &str| r[k].as_str().unwrap().to_string();
                (
                    text("period_from"),
                    text("as_of"),
                    !r["counts"].as_array().unwrap().is_empty(),
                )
            })
            .collect::<Vec<_>>()
    };
    for as_of in ["2026-11-02", "2026-12-02", "2027-01-02"] {
        run(as_of);
    }
    assert_eq!(
        releases(),
        vec![("2026-09-01".to_string(), "2026-11-02".to_string(), true)]
    );
    // 40 people's September activity minutes tripled change a printed median: a new release.
    triple_september_activity(&t, 40);
    run("2027-02-02");
    assert_eq!(releases().len(), 2, "{:?}", releases());
}

/// Triples the September activity minutes of the first `n` participants of a demo program (a
/// file fix that changes a printed median and no count).
fn triple_september_activity(t: &ProgramTest, n: usize) {
    for i in 1..=n {
        let p = t.dir.join(format!("participants/SG-{i:03}/activity.csv"));
        let Ok(text) = std::fs::read_to_string(&p) else {
            continue;
        };
        let fixed: Vec<String> = text
            .lines()
            .map(|l| {
                let mut f: Vec<String> = l.split(',').map(str::to_string).collect();
                if f[0].starts_with("2026-09")
                    && let Ok(m) = f[2].parse::<f64>()
                {
                    f[2] = format!("{}", m * 3.0);
                }
                f.join(",")
            })
            .collect();
        std::fs::write(&p, fixed.join("\n") + "\n").unwrap();
    }
}

/// A ledger that cannot be saved for a full disk left its temporary file, `ledger.tmp`, empty
/// beside the ledger it had not replaced (release run on a 12 MiB tmpfs, attack24). The write
/// that fails now removes it; the ledger and the previous output are as they were.
#[test]
fn a_ledger_write_that_fails_leaves_no_temporary_file() {
    let t = ProgramTest::fixture("report-small");
    let base = t.dir.parent().unwrap().to_path_buf();
    let mnt = base.join("mnt");
    std::fs::create_dir(&mnt).unwrap();
    let Some(_tmpfs) = crate::harness::Tmpfs::mount(&mnt) else {
        return;
    };
    let state = mnt.join("ledger");
    let state_s = state.to_string_lossy().into_owned();
    let run = |period: &str| {
        t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--period",
            period,
            "--formats",
            "html",
            "--state",
            &state_s,
        ])
    };
    assert_eq!(run("2026-08").code, 0);
    let recorded = std::fs::read(state.join("ledger.json")).unwrap();
    // The rest of the file system filled.
    let mut filler = std::fs::File::create(mnt.join("filler")).unwrap();
    let block = vec![0u8; 1 << 20];
    while std::io::Write::write_all(&mut filler, &block).is_ok() {}
    drop(filler);
    let o = run("2026-09");
    assert_eq!(o.code, 6, "{o:?}");
    assert!(o.stderr.contains("No space left on device"), "{}", o.stderr);
    assert!(!state.join("ledger.tmp").exists(), "{}", o.stderr);
    assert_eq!(std::fs::read(state.join("ledger.json")).unwrap(), recorded);
}

/// A month the monthly cron line did not run (the machine off on the 2nd): the next run went
/// from October's release to its own December one without a word, and November's reports were
/// never made (a 12-month tryout, as-of dates 2 Nov then 2 Jan). Now that run says which month
/// has no report and how to make it, at WARN, once: the month after it, and a month made up
/// later, say nothing. The exit code is that of the run's own output (the warning is about no
/// input).
#[test]
fn a_run_after_a_missed_month_names_the_month_and_how_to_make_it() {
    let t = ProgramTest::fixture("report-small");
    let run = |as_of: &str, extra: &[&str]| {
        let mut args = vec!["run", "{dir}", "--as-of", as_of, "--formats", "html"];
        args.extend_from_slice(extra);
        let o = t.run(&args);
        // 1: the fixture's rows dated after an early as-of date are warned about.
        assert!(o.code <= 1, "{o:?}");
        o.stderr
    };
    let missed = "no report of this program was made for";
    // The cron line: April's report, then (May and June missed) July's.
    assert!(!run("2026-05-02", &[]).contains(missed));
    let log = run("2026-08-02", &[]);
    assert!(
        log.contains(
            "no report of this program was made for the months 2026-05, 2026-06, between the \
             last month recorded (2026-04) and this run's (2026-07)"
        ),
        "{log}"
    );
    assert!(
        log.contains("--period 2026-05 --out DIR` with an output folder of its own"),
        "{log}"
    );
    // One month missed (August), then the program's last month reported again after its end:
    // said once.
    let log = run("2026-10-02", &[]);
    assert!(
        log.contains("made for the month 2026-08, between the last month recorded (2026-07)"),
        "{log}"
    );
    assert!(!run("2026-12-02", &[]).contains(missed));
    // A month made up by hand into a folder of its own says nothing about the others.
    assert!(!run("2026-12-03", &["--period", "2026-05", "--out", "may"]).contains(missed));
}

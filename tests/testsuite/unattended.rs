//! Unattended runs never destroy anything: the output folder is owned (a foreign folder, the
//! program folder and its participants are refused before anything is written), partial runs
//! never replace a complete output, a run that cannot produce a complete output leaves the
//! previous one intact, and `check` and `run` give the same exit code for the same inputs.
//! Everything through the real binary, as cron would run it.

use crate::harness::{Outcome, ProgramTest, fixture, tree_hashes};
use std::path::{Path, PathBuf};
use std::process::Command;

const AS_OF: &str = "2026-12-01";
const BIN: &str = env!("CARGO_BIN_EXE_cohortpress");

/// A small program: two clean participants of the broken-program fixture.
fn small() -> ProgramTest {
    with_folders(&["clean-a", "clean-b"])
}

/// The broken-program fixture's program.yaml with only the named participant folders.
fn with_folders(names: &[&str]) -> ProgramTest {
    let t = ProgramTest::fixture("broken-program");
    for entry in std::fs::read_dir(t.dir.join("participants")).unwrap() {
        let entry = entry.unwrap();
        let name = entry.file_name().to_string_lossy().into_owned();
        if !names.contains(&name.as_str()) {
            std::fs::remove_dir_all(entry.path()).unwrap();
        }
    }
    t
}

fn beside(t: &ProgramTest, name: &str) -> PathBuf {
    t.dir.parent().unwrap().join(name)
}

fn run_to(t: &ProgramTest, out: &Path, extra: &[&str]) -> Outcome {
    let out = out.to_string_lossy().into_owned();
    let mut args = vec![
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        &out,
    ];
    args.extend_from_slice(extra);
    t.run(&args)
}

/// A folder that is not ours, with one file in it.
fn foreign_folder(path: &Path) {
    std::fs::create_dir_all(path).unwrap();
    std::fs::write(path.join("thesis.txt"), "years of work\n").unwrap();
}

fn no_leftovers(parent: &Path, name: &str) {
    for suffix in ["staging", "previous"] {
        let p = parent.join(format!(".{name}.{suffix}"));
        assert!(!p.exists(), "{} was left behind", p.display());
    }
}

#[test]
fn a_foreign_out_folder_survives_and_the_run_says_what_to_do() {
    let t = small();
    let mine = beside(&t, "documents");
    foreign_folder(&mine);
    let before = tree_hashes(&mine);
    let o = run_to(&t, &mine, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(o.stderr.contains("not a cohortpress output") || o.stderr.contains("manifest"));
    assert!(o.stderr.contains("name a new folder"), "{}", o.stderr);
    assert_eq!(tree_hashes(&mine), before);
    no_leftovers(mine.parent().unwrap(), "documents");
    // A refused run leaves no trace beside the folder either.
    assert!(!beside(&t, ".documents.lock").exists());
    // merge is refused the same way.
    let shard = beside(&t, "shard-1");
    let o = run_to(&t, &shard, &["--shard", "1/1"]);
    assert_eq!(o.code, 0, "{o:?}");
    let m = t.run(&[
        "merge",
        "{dir}",
        shard.to_str().unwrap(),
        "--out",
        mine.to_str().unwrap(),
    ]);
    assert_eq!(m.code, 2, "{m:?}");
    assert_eq!(tree_hashes(&mine), before);
}

#[test]
fn the_program_folder_its_parent_and_participants_are_never_outputs() {
    let t = small();
    let before = tree_hashes(&t.dir);
    let parent = t.dir.parent().unwrap().to_path_buf();
    let inside = t.dir.join("participants").join("clean-a").join("out");
    for out in [t.dir.clone(), parent.clone(), inside, t.dir.join(".")] {
        let o = run_to(&t, &out, &[]);
        assert_eq!(o.code, 2, "--out {}: {o:?}", out.display());
        assert!(o.stderr.contains("refusing"), "{}", o.stderr);
        assert_eq!(tree_hashes(&t.dir), before, "--out {}", out.display());
    }
    // The same through program.yaml's report.out: exit 3 (the program file is wrong).
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace("report:\n", "report:\n  out: ../program\n");
    std::fs::write(t.dir.join("program.yaml"), &yaml).unwrap();
    let before = tree_hashes(&t.dir);
    let o = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(o.code, 3, "{o:?}");
    assert_eq!(tree_hashes(&t.dir), before);
    assert!(!parent.join(".program.previous").exists());
}

#[test]
fn only_never_replaces_a_complete_output_and_a_typo_is_an_error() {
    let t = small();
    let out = beside(&t, "reports");
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    let complete = tree_hashes(&out);
    assert!(
        complete
            .iter()
            .any(|(p, _)| p == "participants/clean-b.html")
    );

    // A typo'd id: exit 2, nothing written.
    let o = run_to(&t, &out, &["--only", "CLEAN-A"]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(o.stderr.contains("CLEAN-A"), "{}", o.stderr);
    assert_eq!(tree_hashes(&out), complete);

    // A real id into the complete output: refused, the others' reports stay.
    let o = run_to(&t, &out, &["--only", "clean-a"]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(o.stderr.contains("folder of its own"), "{}", o.stderr);
    assert_eq!(tree_hashes(&out), complete);

    // Into a folder of its own: only that participant, and it may be re-run there.
    let part = beside(&t, "only-a");
    for _ in 0..2 {
        let o = run_to(&t, &part, &["--only", "clean-a"]);
        assert_eq!(o.code, 0, "{o:?}");
    }
    assert!(part.join("participants/clean-a.html").is_file());
    assert!(!part.join("participants/clean-b.html").exists());
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(part.join("manifest.json")).unwrap()).unwrap();
    assert_eq!(manifest["scope"], "only");
    // A complete run may replace a partial output.
    let o = run_to(&t, &part, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(part.join("participants/clean-b.html").is_file());
}

/// `run PROGRAM --only ID` without `--out` names the program's own output folder
/// (`report.out`), which holds the complete output: refused as a wrong command line, exit 2, as
/// docs/GUIDE.md says ("`--only` into the complete output is refused with exit 2"). It was exit
/// 3, "program.yaml or the program folder is invalid", with the message located at
/// `program.yaml:LINE:COL` (the `report.out` line), though program.yaml was fine and the
/// command line lacked `--out DIR`.
#[test]
fn only_into_the_programs_own_complete_output_is_a_command_line_error() {
    let t = small();
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    std::fs::write(
        t.dir.join("program.yaml"),
        yaml.replace("report:\n", "report:\n  out: reports\n"),
    )
    .unwrap();
    let run = |extra: &[&str]| {
        let mut args = vec!["run", "{dir}", "--as-of", AS_OF, "--formats", "html"];
        args.extend_from_slice(extra);
        t.run(&args)
    };
    assert_eq!(run(&[]).code, 0);
    let out = t.dir.join("reports");
    let complete = tree_hashes(&out);
    let o = run(&["--only", "clean-a"]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(
        o.stderr.contains(
            "refusing to replace the complete output in {} with a partial one (--only); give \
             the partial run a folder of its own with --out DIR"
                .replace(
                    "{}",
                    &std::fs::canonicalize(&out).unwrap().to_string_lossy()
                )
                .as_str()
        ),
        "{}",
        o.stderr
    );
    assert!(!o.stderr.contains("program.yaml:"), "{}", o.stderr);
    assert_eq!(tree_hashes(&out), complete);
}

#[test]
fn a_missing_or_empty_participants_folder_keeps_last_months_output() {
    let t = small();
    let out = beside(&t, "reports");
    assert_eq!(run_to(&t, &out, &[]).code, 0);
    let before = tree_hashes(&out);
    let parts = t.dir.join("participants");
    let moved = beside(&t, "unmounted");
    std::fs::rename(&parts, &moved).unwrap();
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(check.code, 3, "{check:?}");
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 3, "{o:?}");
    assert_eq!(tree_hashes(&out), before);
    // An empty mount point looks the same to the user, and is treated the same.
    std::fs::create_dir(&parts).unwrap();
    assert_eq!(t.run(&["check", "{dir}", "--as-of", AS_OF]).code, 3);
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 3, "{o:?}");
    assert!(o.stderr.contains("mounted"), "{}", o.stderr);
    assert_eq!(tree_hashes(&out), before);
    no_leftovers(out.parent().unwrap(), "reports");
}

#[cfg(unix)]
#[test]
fn an_output_reached_through_a_link_stays_a_link_and_shares_the_lock() {
    let t = small();
    let real = beside(&t, "real-reports");
    let link = beside(&t, "reports-link");
    std::fs::create_dir(&real).unwrap();
    std::os::unix::fs::symlink(&real, &link).unwrap();
    for _ in 0..2 {
        let o = run_to(&t, &link, &[]);
        assert_eq!(o.code, 0, "{o:?}");
    }
    assert!(
        std::fs::symlink_metadata(&link)
            .unwrap()
            .file_type()
            .is_symlink()
    );
    assert!(real.join("manifest.json").is_file());
    assert!(t.dir.parent().unwrap().join(".real-reports.lock").exists());
    assert!(!t.dir.parent().unwrap().join(".reports-link.lock").exists());
}

#[test]
fn a_failed_run_leaves_no_staging_and_the_previous_output() {
    let t = small();
    let out = beside(&t, "reports");
    assert_eq!(run_to(&t, &out, &[]).code, 0);
    let before = tree_hashes(&out);
    // A template override that fails in strict mode fails the run after staging began.
    let tpl = t.dir.join("my-templates");
    std::fs::create_dir(&tpl).unwrap();
    std::fs::write(
        tpl.join("participant.html.hbs"),
        "<p>{{no_such_value_anywhere}}</p>\n",
    )
    .unwrap();
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace("report:\n", "report:\n  templates: my-templates\n");
    std::fs::write(t.dir.join("program.yaml"), yaml).unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 6, "{o:?}");
    assert_eq!(tree_hashes(&out), before);
    no_leftovers(out.parent().unwrap(), "reports");
}

/// A monthly run whose disk filled, and the next one after the disk was remounted read-only,
/// logged the OS's words and the file ("…/SG-007.html: No space left on device (os error 28)",
/// "…/.reports.lock: Read-only file system (os error 30)") and nothing on what to do
/// (tryout24). Each now says it; the previous output is kept as before. Needs the right to
/// mount (root, as on the project's test machine); skipped with a message without it.
#[cfg(unix)]
#[test]
fn a_full_or_read_only_disk_says_what_to_do() {
    let t = small();
    let mnt = beside(&t, "disk");
    std::fs::create_dir(&mnt).unwrap();
    let Some(tmpfs) = crate::harness::Tmpfs::mount(&mnt) else {
        return;
    };
    let out = mnt.join("reports");
    assert_eq!(run_to(&t, &out, &[]).code, 0);
    let before = tree_hashes(&out);
    // Fill the disk to its last few kilobytes: no second copy of the output fits.
    let mut filler = std::fs::File::create(mnt.join("filler")).unwrap();
    let block = vec![0u8; 4096];
    while std::io::Write::write_all(&mut filler, &block).is_ok() {}
    drop(filler);
    let f = std::fs::OpenOptions::new()
        .write(true)
        .open(mnt.join("filler"))
        .unwrap();
    let len = f.metadata().unwrap().len();
    f.set_len(len.saturating_sub(16 * 1024)).unwrap();
    drop(f);
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 6, "{o:?}");
    assert!(o.stderr.contains("No space left on device"), "{}", o.stderr);
    assert!(
        o.stderr.contains(
            "what to do: free space on the disk that holds the output folder (or raise the \
             quota) and run again"
        ),
        "{}",
        o.stderr
    );
    assert_eq!(tree_hashes(&out), before);
    std::fs::remove_file(mnt.join("filler")).unwrap();
    tmpfs.make_read_only();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr.contains(
            "what to do: the output folder's file system is mounted read-only (a disk \
             remounted read-only after errors should be checked first)"
        ),
        "{}",
        o.stderr
    );
    assert_eq!(tree_hashes(&out), before);
}

/// A file-size limit (`ulimit -f`, as a batch system or a shared host sets one) made the
/// kernel stop the run with SIGXFSZ in the middle of a write: no message from the tool, an exit
/// by signal, and the staging folder left beside the output. A limit reached is now an ordinary
/// failed write: exit 6 with a message naming the file and the limit, the previous output byte
/// for byte, and nothing left over.
#[cfg(unix)]
#[test]
fn a_file_size_limit_fails_the_run_with_a_message_and_keeps_the_previous_output() {
    let t = small();
    let out = beside(&t, "reports");
    assert_eq!(run_to(&t, &out, &[]).code, 0);
    let before = tree_hashes(&out);
    // 16 blocks (8 or 16 KiB as the shell counts them): each participant's report is larger.
    let o = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "ulimit -f 16 && exec \"$0\" run \"$1\" --as-of {AS_OF} --formats html --out \"$2\""
        ))
        .arg(BIN)
        .arg(&t.dir)
        .arg(&out)
        .current_dir(&t.dir)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(6), "{o:?}");
    assert!(stderr.contains("File too large"), "{stderr}");
    assert!(stderr.contains("ulimit -f"), "the limit is named: {stderr}");
    // The file is named once, as the user knows it (the output folder's path and the file,
    // not the staging folder's "participants/A.html"), and the previous outputs are said to be
    // there still: "…/reports/participants/A.html: File too large …; the previous outputs in
    // …/reports were left as they were".
    let line = stderr
        .lines()
        .find(|l| l.contains("writing outputs failed: "))
        .expect("the failed write is reported");
    let named = line.split("writing outputs failed: ").nth(1).unwrap();
    let path = named.split(": ").next().unwrap();
    let shown = std::fs::canonicalize(&out).unwrap();
    let shown = shown.display().to_string();
    assert!(
        path.starts_with(&format!("{shown}/participants/")) && path.ends_with(".html"),
        "{line}"
    );
    assert!(!named[path.len()..].contains(path), "named twice: {line}");
    assert!(
        named.ends_with(&format!(
            "; the previous outputs in {shown} were left as they were"
        )),
        "{line}"
    );
    assert_eq!(tree_hashes(&out), before);
    no_leftovers(out.parent().unwrap(), "reports");
}

/// The tidy metrics are streamed into their files, and a write refused there (a full disk, a
/// file-size limit) was reported as "writing outputs failed: File too large (os error 27)",
/// naming no file. The message now names the file, as for every other output.
#[cfg(unix)]
#[test]
fn a_write_refused_in_a_streamed_metrics_file_names_the_file() {
    let t = ProgramTest::sample();
    let out = beside(&t, "reports");
    // 400 blocks (200 or 400 KiB as the shell counts them): every report and partial result
    // of the sample fits, its metrics/tables.csv (over 1 MB) does not.
    let o = Command::new("sh")
        .arg("-c")
        .arg(format!(
            "ulimit -f 400 && exec \"$0\" run \"$1\" --as-of {AS_OF} --formats html --out \"$2\""
        ))
        .arg(BIN)
        .arg(&t.dir)
        .arg(&out)
        .current_dir(&t.dir)
        .output()
        .unwrap();
    let stderr = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(6), "{o:?}");
    // Named with the output folder's path (it does not exist yet: nothing was written there).
    let shown = std::fs::canonicalize(out.parent().unwrap())
        .unwrap()
        .join("reports");
    let shown = shown.display().to_string();
    assert!(
        stderr.contains(&format!("writing outputs failed: {shown}/metrics/")),
        "the file is named: {stderr}"
    );
    assert!(
        stderr.contains(&format!("; nothing was written to {shown}")),
        "{stderr}"
    );
    assert!(stderr.contains("ulimit -f"), "the limit is named: {stderr}");
    assert!(!out.exists(), "no output was left");
    no_leftovers(out.parent().unwrap(), "reports");
}

#[test]
fn a_run_killed_between_the_renames_is_recovered() {
    let t = small();
    let out = beside(&t, "reports");
    assert_eq!(run_to(&t, &out, &[]).code, 0);
    let parent = out.parent().unwrap().to_path_buf();
    // Killed after the first rename: only `.reports.previous` exists. The log says what was
    // put back.
    std::fs::rename(&out, parent.join(".reports.previous")).unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        o.stderr
            .contains("was stopped (killed, or a power cut) as it put its output in place"),
        "{o:?}"
    );
    // Killed after the second rename, before the removal: both exist.
    let copy = parent.join(".reports.previous");
    crate::harness::copy_tree(&out, &copy);
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    no_leftovers(&parent, "reports");
    // Killed right after creating its staging folder (still empty), or after the swap but
    // before removing the staging marker: both are recognised as ours.
    std::fs::create_dir(parent.join(".reports.staging")).unwrap();
    std::fs::write(out.join(".cohortpress-staging"), "").unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    // A killed run's staging folder is not removed without a word (tryout24).
    assert!(
        o.stderr
            .contains("did not finish (killed, or a power cut): its unfinished output"),
        "{o:?}"
    );
    assert!(o.stderr.contains("was left as that run found it"), "{o:?}");
    no_leftovers(&parent, "reports");
    assert!(!out.join(".cohortpress-staging").exists());
    // Killed on its first run into a folder that does not exist yet: nothing to leave as it was.
    let aside = parent.join("kept-aside");
    std::fs::rename(&out, &aside).unwrap();
    std::fs::create_dir(parent.join(".reports.staging")).unwrap();
    std::fs::write(parent.join(".reports.staging/.cohortpress-staging"), "").unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(
        o.stderr.contains("nothing had been put in its place"),
        "{o:?}"
    );
    std::fs::remove_dir_all(&aside).unwrap();
    // Something foreign in the swap's way is never deleted.
    foreign_folder(&copy);
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(copy.join("thesis.txt").is_file());
}

#[test]
fn check_and_run_give_the_same_exit_code_for_every_broken_fixture() {
    let names: Vec<String> = std::fs::read_dir(fixture("broken-program").join("participants"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert!(
        names.len() >= 10,
        "the fixture has one folder per defect kind"
    );
    for name in &names {
        let t = with_folders(&["clean-a", name]);
        let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
        let out = beside(&t, "reports");
        let run = run_to(&t, &out, &[]);
        assert_eq!(
            check.code, run.code,
            "{name}: check {} vs run {}\n{}\n{}",
            check.code, run.code, check.stdout, run.stderr
        );
    }
}

#[test]
fn a_panic_maps_to_exit_code_70_with_one_line() {
    let t = small();
    let out = Command::new(BIN)
        .args(["check", t.dir.to_str().unwrap(), "--as-of", AS_OF])
        .env_clear()
        .env("COHORTPRESS_DEBUG_PANIC", "1")
        .output()
        .unwrap();
    assert_eq!(out.status.code(), Some(70), "{out:?}");
    let stderr = String::from_utf8_lossy(&out.stderr);
    assert!(stderr.starts_with("internal error"), "{stderr}");
    assert_eq!(stderr.trim_end().lines().count(), 1, "{stderr}");
}

/// `cohortpress check … | head`: the reader closes the pipe before the report is written. The code
/// still says what the inputs are (the same as with the whole report read), not "writing failed".
#[test]
fn check_into_a_closed_pipe_keeps_the_inputs_exit_code() {
    let t = ProgramTest::fixture("broken-program");
    let whole = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert!(!whole.stdout.is_empty());
    let mut child = Command::new(BIN)
        .args(["check", t.dir.to_str().unwrap(), "--as-of", AS_OF])
        .env_clear()
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    // Closing our end before the child has checked anything: its first write meets a closed pipe.
    drop(child.stdout.take());
    let status = child.wait().unwrap();
    assert_eq!(status.code(), Some(whole.code), "{whole:?}");
    assert_ne!(status.code(), Some(6));
}

/// `cohortpress modules | head`: a listing cut short by its reader is not a crash (exit 70).
#[test]
fn modules_into_a_closed_pipe_is_not_an_internal_error() {
    let mut child = Command::new(BIN)
        .arg("modules")
        .env_clear()
        .stdout(std::process::Stdio::piped())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    drop(child.stdout.take());
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(0), "{out:?}");
    assert!(
        out.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
}

/// Runs `cohortpress ARGS…` like [`ProgramTest::run`], but kills it after `secs` seconds; `None`
/// when it had to be killed (a run that waits forever under cron holds its lock forever).
fn run_within(t: &ProgramTest, args: &[&str], secs: u64) -> Option<i32> {
    let mut child = Command::new(BIN)
        .args(
            args.iter()
                .map(|a| a.replace("{dir}", &t.dir.to_string_lossy())),
        )
        .current_dir(&t.dir)
        .stdin(std::process::Stdio::null())
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let deadline = std::time::Instant::now() + std::time::Duration::from_secs(secs);
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            return status.code();
        }
        if std::time::Instant::now() > deadline {
            child.kill().unwrap();
            child.wait().unwrap();
            return None;
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
}

#[test]
fn an_output_inside_participants_reached_through_its_link_is_refused() {
    // participants/ may be a link to a share; its real path is still an input.
    let t = small();
    let share = beside(&t, "share-participants");
    std::fs::rename(t.dir.join("participants"), &share).unwrap();
    std::os::unix::fs::symlink(&share, t.dir.join("participants")).unwrap();
    let before = tree_hashes(&share);
    for out in [share.join("reports"), share.join("clean-a").join("out")] {
        let o = run_to(&t, &out, &[]);
        assert_eq!(o.code, 2, "--out {}: {o:?}", out.display());
        assert!(o.stderr.contains("participants/"), "{}", o.stderr);
        assert_eq!(tree_hashes(&share), before, "--out {}", out.display());
        assert!(!out.exists());
    }
    // A folder holding the (linked) participants is refused too, even an empty-looking one
    // would be: here the share's parent, which holds the program as well as the participants.
    let o = run_to(&t, share.parent().unwrap(), &[]);
    assert_eq!(o.code, 2, "{o:?}");
}

#[test]
fn the_templates_folder_is_never_an_output() {
    let t = small();
    let templates = t.dir.join("my-templates");
    std::fs::create_dir(&templates).unwrap();
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace("report:\n", "report:\n  templates: my-templates\n");
    std::fs::write(t.dir.join("program.yaml"), &yaml).unwrap();
    let o = run_to(&t, &templates, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(o.stderr.contains("templates"), "{}", o.stderr);
    assert_eq!(std::fs::read_dir(&templates).unwrap().count(), 0);
}

#[test]
fn planted_previous_and_staging_links_are_neither_followed_nor_removed() {
    let t = small();
    let precious = beside(&t, "precious");
    foreign_folder(&precious);
    let before = tree_hashes(&precious);
    let out = beside(&t, "reports");
    let previous = beside(&t, ".reports.previous");
    let staging = beside(&t, ".reports.staging");

    // No output yet, a link named like a left-over previous output: not moved into place.
    std::os::unix::fs::symlink(&precious, &previous).unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(o.stderr.contains(".reports.previous"), "{}", o.stderr);
    assert!(std::fs::symlink_metadata(&previous).unwrap().is_symlink());
    assert!(
        std::fs::symlink_metadata(&out).is_err(),
        "the link was moved"
    );
    std::fs::remove_file(&previous).unwrap();

    // A real folder of someone else's under that name is not moved into place either.
    foreign_folder(&previous);
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(previous.join("thesis.txt").exists());
    assert!(std::fs::symlink_metadata(&out).is_err());
    std::fs::remove_dir_all(&previous).unwrap();

    // A staging link to a folder that carries the staging marker: neither emptied nor removed.
    std::fs::write(precious.join(".cohortpress-staging"), "").unwrap();
    let before_marked = tree_hashes(&precious);
    std::os::unix::fs::symlink(&precious, &staging).unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(std::fs::symlink_metadata(&staging).unwrap().is_symlink());
    assert_eq!(tree_hashes(&precious), before_marked);
    std::fs::remove_file(&staging).unwrap();
    std::fs::remove_file(precious.join(".cohortpress-staging")).unwrap();

    // With a complete output in place, a previous link to another cohortpress output.
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    let other = beside(&t, "other-reports");
    assert_eq!(run_to(&t, &other, &[]).code, 0);
    let other_before = tree_hashes(&other);
    std::os::unix::fs::symlink(&other, &previous).unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(std::fs::symlink_metadata(&previous).unwrap().is_symlink());
    assert_eq!(tree_hashes(&other), other_before);
    assert_eq!(tree_hashes(&precious), before);
}

#[test]
fn an_empty_out_folder_filled_during_the_run_is_not_deleted() {
    // Someone saves a file into the (empty) output folder while the run goes on: here an
    // external module does it, at a known moment.
    let t = small();
    let out = beside(&t, "shared-drive");
    std::fs::create_dir(&out).unwrap();
    let fake = fixture("fake-plugins").join("fake.py");
    // The first call (the handshake, before the run starts writing) leaves a flag; the
    // later ones (computing, while the run writes its staging folder) save the file.
    let flag = beside(&t, "handshake-done");
    let script = format!(
        "if [ -e '{flag}' ]; then echo notes > '{out}/notes.txt'; else touch '{flag}'; fi; \
         exec python3 '{fake}' tallies ok",
        flag = flag.display(),
        out = out.display(),
        fake = fake.display()
    );
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace(
        "  - id: outcomes\n",
        &format!("  - id: outcomes\n  - id: tallies\n    command: [sh, -c, \"{script}\"]\n"),
    );
    std::fs::write(t.dir.join("program.yaml"), &yaml).unwrap();
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 6, "{o:?}");
    assert!(
        o.stderr.contains("notes.txt") || o.stderr.contains("not empty"),
        "{}",
        o.stderr
    );
    assert_eq!(
        std::fs::read_to_string(out.join("notes.txt")).unwrap(),
        "notes\n"
    );
    no_leftovers(out.parent().unwrap(), "shared-drive");
}

#[test]
fn a_fifo_or_device_in_the_previous_output_never_hangs_incremental_or_merge() {
    let t = small();
    let out = beside(&t, "reports");
    assert_eq!(run_to(&t, &out, &[]).code, 0);
    let cache = out.join("cache").join("clean-a.json");
    std::fs::remove_file(&cache).unwrap();
    assert!(
        Command::new("mkfifo")
            .arg(&cache)
            .status()
            .unwrap()
            .success()
    );
    let o = run_within(
        &t,
        &[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--out",
            out.to_str().unwrap(),
            "--incremental",
        ],
        30,
    );
    assert_eq!(o, Some(0), "the run waited on a FIFO");
    // The report replaced by a link to a device that never ends: recomputed, never read.
    let report = out.join("participants").join("clean-b.html");
    std::fs::remove_file(&report).unwrap();
    std::os::unix::fs::symlink("/dev/zero", &report).unwrap();
    let o = run_within(
        &t,
        &[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--formats",
            "html",
            "--out",
            out.to_str().unwrap(),
            "--incremental",
        ],
        30,
    );
    assert_eq!(o, Some(0));
    assert!(std::fs::symlink_metadata(&report).unwrap().is_file());

    // merge: a shard whose partial result is a FIFO is refused, not waited on.
    let shard = beside(&t, "shard-1");
    assert_eq!(run_to(&t, &shard, &["--shard", "1/1"]).code, 0);
    let cache = shard.join("cache").join("clean-a.json");
    std::fs::remove_file(&cache).unwrap();
    assert!(
        Command::new("mkfifo")
            .arg(&cache)
            .status()
            .unwrap()
            .success()
    );
    let merged = beside(&t, "merged");
    let o = run_within(
        &t,
        &[
            "merge",
            "{dir}",
            shard.to_str().unwrap(),
            "--out",
            merged.to_str().unwrap(),
        ],
        30,
    );
    assert!(matches!(o, Some(c) if c != 0), "merge: {o:?}");
    assert!(!merged.exists());
}

#[test]
fn a_refused_out_creates_no_folder_on_its_way() {
    // mkdir -p of the output's parents happens only once the folder is accepted: a refused
    // run must not leave a new folder inside a participant's data.
    let t = small();
    let inside = t.dir.join("participants/clean-a/new/reports");
    let o = run_to(&t, &inside, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(!t.dir.join("participants/clean-a/new").exists());
    // `..` past a folder that does not exist cannot be resolved: refused, nothing created.
    let odd = t.dir.join("participants/ghost/../../../elsewhere");
    let o = run_to(&t, &odd, &[]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(!t.dir.join("participants/ghost").exists());
    // An accepted new output still gets its parents.
    let deep = beside(&t, "a/b/reports");
    assert_eq!(run_to(&t, &deep, &[]).code, 0);
    assert!(deep.join("manifest.json").is_file());
}

#[test]
fn check_and_run_agree_on_a_report_out_that_may_not_be_written() {
    let t = small();
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let foreign = beside(&t, "documents");
    foreign_folder(&foreign);
    for out in ["..", "participants/clean-a", foreign.to_str().unwrap()] {
        let y = yaml.replace("report:\n", &format!("report:\n  out: {out}\n"));
        std::fs::write(t.dir.join("program.yaml"), &y).unwrap();
        let c = t.run(&["check", "{dir}", "--as-of", AS_OF]);
        let r = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
        assert_eq!(r.code, 3, "report.out {out}: {r:?}");
        assert_eq!(c.code, r.code, "report.out {out}: {c:?}");
        assert!(
            c.stdout.contains("report.out") || c.stderr.contains("report.out"),
            "{c:?}"
        );
        // Both name the file, line and column of `report.out`'s value (after `  out: `).
        let line = y.lines().position(|l| l.starts_with("  out: ")).unwrap() + 1;
        let at = format!("program.yaml:{line}:8:");
        assert!(c.stdout.contains(&at), "report.out {out}: {at} in {c:?}");
        assert!(r.stderr.contains(&at), "report.out {out}: {at} in {r:?}");
    }
}

/// A group report of hand-picked participants, set against the complete one, gives the figures
/// of the people left out (everyone but one: that one's change, milestone, attendance…), and
/// an `--only` output has a ledger of its own, so the audit across releases never sees the two
/// together. An `--only` run (and the merge of its shards) writes no group outputs and records
/// nothing in a ledger; its participant reports and tidy metrics are written as before.
#[test]
fn an_only_run_writes_no_group_report_to_difference_against_the_complete_one() {
    let t = small();
    let out = beside(&t, "reports");
    let o = run_to(&t, &out, &[]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(out.join("group/program.html").is_file());
    assert!(out.join("metrics/group.json").is_file());

    let part = beside(&t, "all-but-b");
    let o = run_to(&t, &part, &["--only", "clean-a"]);
    assert_eq!(o.code, 0, "{o:?}");
    assert!(part.join("participants/clean-a.html").is_file());
    assert!(part.join("metrics/participants.csv").is_file());
    assert!(
        !part.join("group").exists(),
        "an --only run wrote a group report"
    );
    assert!(!part.join("metrics/group.json").exists());
    assert!(
        !beside(&t, "all-but-b.ledger").exists(),
        "a ledger of its own"
    );
    let manifest: serde_json::Value =
        serde_json::from_slice(&std::fs::read(part.join("manifest.json")).unwrap()).unwrap();
    let outputs = manifest["outputs"].as_array().unwrap();
    assert!(
        !outputs
            .iter()
            .any(|f| f["path"].as_str().unwrap().contains("group")),
        "{outputs:?}"
    );
}

/// A shard's folder is recognised by its `shard.json`, which made the whole folder the tool's
/// own whatever else it held: a `shard.json` copied into a home folder (to read it), then a
/// run with `--out` naming that folder, deleted every file in it; so did a shard run again
/// over files put in its folder since (notes, a scheduler's log). Both are refused now, as an
/// output with a manifest is, and nothing is touched.
#[test]
fn a_shard_json_never_makes_a_folder_of_someone_elses_replaceable() {
    let t = small();
    let shard = beside(&t, "shard-1");
    let o = run_to(&t, &shard, &["--shard", "1/1"]);
    assert_eq!(o.code, 0, "{o:?}");
    // A home folder with a copy of the shard's shard.json.
    let home = beside(&t, "home");
    foreign_folder(&home.join("Documents"));
    std::fs::copy(shard.join("shard.json"), home.join("shard.json")).unwrap();
    let before = tree_hashes(&home);
    for extra in [&[][..], &["--shard", "1/1"][..]] {
        let o = run_to(&t, &home, extra);
        assert_eq!(o.code, 2, "{extra:?}: {o:?}");
        assert!(o.stderr.contains("Documents/thesis.txt"), "{}", o.stderr);
        assert!(
            o.stderr.contains("shard.json does not list"),
            "{}",
            o.stderr
        );
        assert_eq!(tree_hashes(&home), before, "{extra:?}");
        no_leftovers(home.parent().unwrap(), "home");
    }
    // A note put into a shard's own folder survives running the shard again.
    std::fs::write(shard.join("notes.txt"), "ask about clean-b\n").unwrap();
    let before = tree_hashes(&shard);
    let o = run_to(&t, &shard, &["--shard", "1/1"]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(o.stderr.contains("`notes.txt`"), "{}", o.stderr);
    assert_eq!(tree_hashes(&shard), before);
    // Without the note the shard's folder is its own again, and a shard file of the older
    // format (no list of outputs) is known by its participants' files.
    std::fs::remove_file(shard.join("notes.txt")).unwrap();
    let o = run_to(&t, &shard, &["--shard", "1/1"]);
    assert_eq!(o.code, 0, "{o:?}");
    let mut file: serde_json::Value =
        serde_json::from_slice(&std::fs::read(shard.join("shard.json")).unwrap()).unwrap();
    assert!(file["outputs"].as_array().is_some_and(|a| !a.is_empty()));
    file.as_object_mut().unwrap().remove("outputs");
    std::fs::write(shard.join("shard.json"), file.to_string()).unwrap();
    let o = run_to(&t, &shard, &["--shard", "1/1"]);
    assert_eq!(o.code, 0, "{o:?}");
}

/// "Today" is the participants' day when program.yaml names their time zone (attack22): a cron
/// job on a machine whose day is behind theirs (a server in UTC or America, a program in New
/// Zealand) took a weigh-in of their today for future data ("date … is in the future (after
/// the as-of date …); the row is dropped"), and every such run ended with warnings. Here the
/// machine's clock is UTC−12 and the program's zone UTC+14, so the two dates always differ.
#[test]
fn today_is_the_participants_day_when_the_program_names_their_time_zone() {
    let t = with_folders(&["clean-a"]);
    let theirs = (chrono::Utc::now() + chrono::Duration::hours(14)).date_naive();
    let start = theirs - chrono::Duration::days(60);
    let yaml = std::fs::read_to_string(t.dir.join("program.yaml"))
        .unwrap()
        .replace("start: 2026-04-01", &format!("start: {start}"))
        .replace(
            "end: 2026-09-30",
            &format!("end: {}", theirs + chrono::Duration::days(60)),
        );
    std::fs::write(
        t.dir.join("program.yaml"),
        format!("{yaml}input:\n  time_zone: \"+14:00\"\n"),
    )
    .unwrap();
    let folder = t.dir.join("participants/clean-a");
    for f in ["activity.csv", "intake.csv", "labs.csv", "sessions.csv"] {
        std::fs::remove_file(folder.join(f)).unwrap();
    }
    let profile = std::fs::read_to_string(folder.join("profile.yaml"))
        .unwrap()
        .replace("enrolled: 2026-04-01", &format!("enrolled: {start}"));
    std::fs::write(folder.join("profile.yaml"), profile).unwrap();
    let mut weights = String::from("date,weight,unit\n");
    for k in (0..30).rev() {
        let day = theirs - chrono::Duration::days(k);
        weights.push_str(&format!("{day},{:.1},kg\n", 80.0 - 0.05 * (30 - k) as f64));
    }
    std::fs::write(folder.join("weights.csv"), weights).unwrap();
    // POSIX form (no zone database needed): 12 hours behind UTC.
    // The machine's day is one or two days behind theirs, by the hour the test runs: one row
    // in its future is "date … is in the future", more are "N rows are dated after the as-of
    // date".
    let future = |out: &str| out.contains("in the future") || out.contains("after the as-of date");
    let checked = t.run_env(&["check", "{dir}"], &[("TZ", "<-12>12")]);
    assert_eq!(checked.code, 0, "{}", checked.stdout);
    assert!(!future(&checked.stdout), "{}", checked.stdout);
    // Without the zone, the machine's day is the run's: the last weigh-ins are in its future.
    std::fs::write(t.dir.join("program.yaml"), &yaml).unwrap();
    let checked = t.run_env(&["check", "{dir}"], &[("TZ", "<-12>12")]);
    assert_eq!(checked.code, 1, "{}", checked.stdout);
    assert!(future(&checked.stdout), "{}", checked.stdout);
    assert!(
        checked.stdout.contains(&theirs.to_string()),
        "their last day is named: {}",
        checked.stdout
    );
}

/// A participant who withdrew consent on 2026-06-15 and whose scale and apps kept syncing into
/// their folder: every later monthly run ended with exit code 1, five warnings giving the
/// number and dates of the rows after the withdrawal (also in the participant's own report),
/// and `weights_rows_in_file` counted them. Now the run of the month they left warns, once
/// per file, saying what to do and nothing of the rows; later months' runs are clean (exit
/// code 0) and show nothing of them either; `check` still lists them.
#[test]
fn rows_synced_after_withdrawn_consent_warn_in_the_month_of_leaving_only() {
    let t = ProgramTest::fixture("report-small");
    let folder = t.dir.join("participants/SG-003");
    let profile = std::fs::read_to_string(folder.join("profile.yaml")).unwrap();
    std::fs::write(
        folder.join("profile.yaml"),
        profile.replace(
            "enrolled: 2026-04-01\n",
            "enrolled: 2026-04-01\nwithdrew: 2026-06-15\n",
        ),
    )
    .unwrap();
    // The scale also synced a weigh-in that does not read, one twice, and a row of the wrong
    // shape (a field too many), whose warning quoted the row, weight included, every month.
    let mut weights = std::fs::read_to_string(folder.join("weights.csv")).unwrap();
    let last = weights.lines().last().unwrap().to_string();
    weights.push_str(&format!(
        "2026-09-29,7x1.5,lb,home-scale\n{last}\n2026-09-30,161.37,lb,home-scale,synced\n"
    ));
    std::fs::write(folder.join("weights.csv"), &weights).unwrap();
    let after = weights
        .lines()
        .skip(1)
        .filter(|l| l.get(..10).is_some_and(|d| d > "2026-06-15"))
        .count();
    assert!(
        after > 10,
        "the fixture has weigh-ins after 15 June: {after}"
    );
    let run = |period: &str| {
        let out = beside(&t, &format!("out-{period}"));
        let o = run_to(&t, &out, &["--period", period]);
        (o, out)
    };
    let (june, june_out) = run("2026-06");
    assert_eq!(june.code, 1, "{}", june.stderr);
    let dq = std::fs::read_to_string(june_out.join("metrics/data-quality.csv")).unwrap();
    let said: Vec<&str> = dq
        .lines()
        .filter(|l| l.contains("consent was withdrawn (2026-06-15)"))
        .collect();
    assert_eq!(said.len(), 5, "one per file:\n{dq}");
    assert!(
        said.iter().all(|l| l.starts_with("warning,SG-003,")),
        "{said:#?}"
    );
    // Nothing of the rows after it: neither their dates nor their number nor their values.
    assert!(
        !dq.contains("7x1.5") && !dq.contains("duplicate") && !dq.contains("161.37"),
        "{dq}"
    );
    assert!(
        !dq.contains("2026-06-16") && !dq.contains("rows are dated after"),
        "{dq}"
    );
    let report = std::fs::read_to_string(june_out.join("participants/SG-003.html")).unwrap();
    assert!(
        !report.contains("withdrawn (2026-06-15)"),
        "the staff's, not the participant's"
    );
    for period in ["2026-07", "2026-09"] {
        let (o, out) = run(period);
        assert_eq!(o.code, 0, "{period}: {}", o.stderr);
        assert!(o.stderr.contains(" 0 warnings"), "{}", o.stderr);
        let dq = std::fs::read_to_string(out.join("metrics/data-quality.csv")).unwrap();
        assert!(!dq.contains("SG-003"), "{period}: {dq}");
        let csv = std::fs::read_to_string(out.join("metrics/participants.csv")).unwrap();
        let header: Vec<&str> = csv.lines().next().unwrap().split(',').collect();
        let row: Vec<&str> = csv
            .lines()
            .find(|l| l.starts_with("SG-003,"))
            .unwrap()
            .split(',')
            .collect();
        let col = |n: &str| row[header.iter().position(|h| *h == n).unwrap()];
        assert_eq!(
            col("weights_rows_in_file"),
            col("weights_rows_used"),
            "{period}: the rows after the withdrawal are counted nowhere"
        );
    }
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert!(
        check.stdout.contains("consent was withdrawn (2026-06-15)"),
        "{}",
        check.stdout
    );
}

/// The time library reads the file `TZ` names, whole: `TZ=/dev/zero cohortpress run PROGRAM`
/// (no `--as-of`) read forever, as did `/dev/urandom` or a FIFO. No file `TZ` names is read
/// now: a zone name is read as a name (also inside a zoneinfo path), a POSIX rule as a rule,
/// anything else gives UTC, and the log says which zone gave "today". A run killed after 120 s
/// (runs here take about a second) fails the test rather than hanging it.
#[test]
fn today_never_reads_a_file_tz_names() {
    let t = with_folders(&["clean-a"]);
    let scratch = t.dir.parent().unwrap();
    let fifo = scratch.join("tz-fifo");
    assert!(
        Command::new("mkfifo")
            .arg(&fifo)
            .status()
            .unwrap()
            .success(),
        "mkfifo"
    );
    // 4 GiB, sparse: a zone file nobody should read.
    let huge = scratch.join("tz-huge");
    std::fs::File::create(&huge)
        .unwrap()
        .set_len(4 << 30)
        .unwrap();
    let cases: Vec<(String, &str)> = vec![
        ("/dev/zero".into(), "in UTC: TZ=\"/dev/zero\""),
        ("/dev/urandom".into(), "in UTC: TZ=\"/dev/urandom\""),
        (fifo.to_string_lossy().into_owned(), "in UTC: TZ="),
        (huge.to_string_lossy().into_owned(), "in UTC: TZ="),
        (scratch.to_string_lossy().into_owned(), "in UTC: TZ="),
        (":/dev/zero".into(), "in UTC: TZ=\"/dev/zero\""),
        (
            "Pacific/Kiritimati".into(),
            "in the machine's time zone Pacific/Kiritimati (TZ)",
        ),
        (
            "/usr/share/zoneinfo/Pacific/Kiritimati".into(),
            "in the machine's time zone Pacific/Kiritimati (named by TZ's path",
        ),
        (
            "<-12>12".into(),
            "in the machine's time zone rule TZ=\"<-12>12\"",
        ),
    ];
    for (tz, says) in cases {
        let log = scratch.join("tz-log");
        let mut child = Command::new(BIN)
            .args(["run", &t.dir.to_string_lossy(), "--out", "out"])
            .current_dir(&t.dir)
            .env_clear()
            .env("PATH", std::env::var("PATH").unwrap_or_default())
            .env("TZ", &tz)
            .stdin(std::process::Stdio::null())
            .stdout(std::process::Stdio::null())
            .stderr(std::fs::File::create(&log).unwrap())
            .spawn()
            .unwrap();
        let deadline = std::time::Instant::now() + std::time::Duration::from_secs(120);
        let status = loop {
            if let Some(s) = child.try_wait().unwrap() {
                break s;
            }
            if std::time::Instant::now() > deadline {
                child.kill().unwrap();
                child.wait().unwrap();
                panic!("TZ={tz}: the run was still going after 120 s");
            }
            std::thread::sleep(std::time::Duration::from_millis(50));
        };
        let stderr = std::fs::read_to_string(&log).unwrap();
        assert!(status.code().is_some(), "TZ={tz}: {stderr}");
        let line = stderr
            .lines()
            .find(|l| l.contains("today is "))
            .unwrap_or_else(|| panic!("TZ={tz}: no line on today: {stderr}"));
        assert!(line.contains(says), "TZ={tz}: {line}");
    }
}

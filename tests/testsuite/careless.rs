//! What a careless (not hostile) user does to a program and its outputs, through the real
//! binary: keeps files of their own in the output folder, leaves two folders for one person
//! whose names differ in case, saves a file as "Unicode text" (UTF-16), and breaks one file of
//! one participant while another's profile is missing.

use crate::harness::{ProgramTest, tree_hashes};
use std::fs;
use std::path::{Path, PathBuf};

const AS_OF: &str = "2026-12-01";

fn out_dir(t: &ProgramTest) -> PathBuf {
    t.dir.parent().unwrap().join("out")
}

fn run(t: &ProgramTest, formats: &str) -> crate::harness::Outcome {
    let out = out_dir(t);
    t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        formats,
        "--out",
        out.to_str().unwrap(),
    ])
}

/// The group report's sentence about participant folders it leaves out.
fn left_out_note(out: &Path) -> String {
    let html = fs::read_to_string(out.join("group/program.html")).unwrap();
    html.split(['<', '>'])
        .filter(|s| s.contains("could not be used because of input errors"))
        .collect::<Vec<_>>()
        .join(" / ")
}

#[test]
fn files_of_someone_elses_in_an_output_folder_are_never_deleted() {
    let t = ProgramTest::demo(3);
    let out = out_dir(&t);
    assert_eq!(run(&t, "html").code, 0);
    // Last month's group report kept beside this month's, and a note: the next run replaced the
    // folder as a whole and deleted both.
    fs::create_dir_all(out.join("archive")).unwrap();
    fs::write(out.join("archive/2026-10-program.html"), b"kept").unwrap();
    fs::write(out.join("group/notes.txt"), b"mine").unwrap();
    let before = tree_hashes(&out);
    let o = run(&t, "html");
    assert_eq!(o.code, 2, "{o:?}");
    assert!(
        o.stderr
            .contains("`archive/2026-10-program.html`, `group/notes.txt`"),
        "{}",
        o.stderr
    );
    assert!(o.stderr.contains("move them out"), "{}", o.stderr);
    assert_eq!(tree_hashes(&out), before, "nothing was replaced");
    // A link the run did not write counts as well (removing it loses what it points to's name).
    fs::remove_dir_all(out.join("archive")).unwrap();
    fs::remove_file(out.join("group/notes.txt")).unwrap();
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(&t.dir, out.join("program-link")).unwrap();
        let o = run(&t, "html");
        assert_eq!(o.code, 2, "{o:?}");
        assert!(o.stderr.contains("`program-link`"), "{}", o.stderr);
        fs::remove_file(out.join("program-link")).unwrap();
        // A name with a backslash is not the listed path it would spell on Windows.
        fs::write(out.join("participants\\SG-001.html"), b"mine").unwrap();
        let o = run(&t, "html");
        assert_eq!(o.code, 2, "{o:?}");
        fs::remove_file(out.join("participants\\SG-001.html")).unwrap();
    }
    // What a file manager leaves when someone looks at the reports, and an empty folder, are
    // nobody's work: the run goes on.
    fs::write(out.join(".DS_Store"), b"x").unwrap();
    fs::write(out.join("participants/Thumbs.db"), b"x").unwrap();
    fs::create_dir(out.join("empty")).unwrap();
    let o = run(&t, "html");
    assert_eq!(o.code, 0, "{o:?}");
    assert!(!out.join(".DS_Store").exists());
    assert!(!out.join("empty").exists());
}

#[test]
fn an_output_folder_of_another_program_is_never_replaced() {
    // Two programs' cron lines with one --out: the second run replaced the first program's
    // reports with its own, and the first sponsor's group report with the second's.
    let t = ProgramTest::demo(3);
    let out = out_dir(&t);
    assert_eq!(run(&t, "html").code, 0);
    let other = t.dir.parent().unwrap().join("other");
    crate::harness::copy_tree(&t.dir, &other);
    let yaml = fs::read_to_string(other.join("program.yaml")).unwrap();
    let (head, tail) = yaml.split_once("  id: ").unwrap();
    let rest = tail.split_once(' ').unwrap().1;
    fs::write(
        other.join("program.yaml"),
        format!("{head}  id: other-program {rest}"),
    )
    .unwrap();
    let before = tree_hashes(&out);
    let o = t.run(&[
        "run",
        other.to_str().unwrap(),
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        out.to_str().unwrap(),
    ]);
    assert_eq!(o.code, 2, "{o:?}");
    assert!(
        o.stderr.contains(
            "it holds the output of another program, `steady-ground-2026` (this one is \
             `other-program`)"
        ),
        "{}",
        o.stderr
    );
    assert_eq!(tree_hashes(&out), before, "nothing was replaced");
    // The program's own next run still replaces its own output.
    assert_eq!(run(&t, "html").code, 0);
}

#[test]
fn the_group_report_names_only_the_participants_it_leaves_out() {
    let t = ProgramTest::demo(5);
    let out = out_dir(&t);
    // Two participants' intake files have no usable header: those files are left out, the
    // participants are reported and counted.
    for id in ["SG-002", "SG-003"] {
        let intake = t.dir.join(format!("participants/{id}/intake.csv"));
        let text = fs::read_to_string(&intake).unwrap();
        let rest = text.split_once('\n').unwrap().1;
        fs::write(&intake, format!("day,energy_x\n{rest}")).unwrap();
    }
    // One profile missing and one folder whose name is not an id: both left out.
    fs::remove_file(t.dir.join("participants/SG-004/profile.yaml")).unwrap();
    fs::create_dir(t.dir.join("participants/SG 9")).unwrap();
    let o = run(&t, "html");
    assert_eq!(o.code, 4, "{o:?}");
    assert!(out.join("participants/SG-002.html").exists());
    assert!(out.join("participants/SG-003.html").exists());
    assert!(!out.join("participants/SG-004.html").exists());
    // It said "3 participant folders could not be used … and are not counted here" (now: no
    // number; see `the_left_out_note_gives_back_no_count_the_audit_hides`).
    assert_eq!(
        left_out_note(&out),
        "Some participant folders could not be used because of input errors and are not counted here; the program staff&#x27;s data-quality list (metrics/data-quality.csv, identified: not for the sponsor) names them and the problems."
    );
}

/// A month re-issued after one folder broke (its profile deleted), sharing the first release's
/// ledger: the audit hides the enrolled count (prints a range), which differs from the first
/// release's 14 by one person; the note on folders left out said "One participant folder could not be used", which
/// gave it back (14 − 1). The note now gives no number.
#[test]
fn the_left_out_note_gives_back_no_count_the_audit_hides() {
    let t = ProgramTest::demo(14);
    let out = out_dir(&t);
    let text = |out: &Path| {
        let html = fs::read_to_string(out.join("group/program.html")).unwrap();
        let mut t = String::new();
        let mut tag = false;
        for c in html.replace("&#x27;", "'").chars() {
            match c {
                '<' => tag = true,
                '>' => {
                    tag = false;
                    t.push(' ');
                }
                c if !tag => t.push(c),
                _ => {}
            }
        }
        t.split_whitespace().collect::<Vec<_>>().join(" ")
    };
    assert_eq!(run(&t, "html").code, 0);
    assert!(text(&out).contains("Enrolled 14 "), "{}", text(&out));
    fs::remove_file(t.dir.join("participants/SG-005/profile.yaml")).unwrap();
    assert_eq!(run(&t, "html").code, 4);
    let second = text(&out);
    // The audit does not print 13 (here a range such as "5–18"): a one-person difference.
    assert!(second.contains("Enrolled "), "{second}");
    assert!(!second.contains("Enrolled 13 "), "{second}");
    assert!(
        second.contains(
            "Some participant folders could not be used because of input errors and are not counted here"
        ),
        "{second}"
    );
    // No number in front of it ("1 participant folder", "One participant folder").
    assert!(!second.contains("One participant folder"));
    for (at, _) in second.match_indices(" participant folder") {
        let word = second[..at].rsplit(' ').next().unwrap();
        assert!(!word.chars().any(|c| c.is_ascii_digit()), "{word}");
    }
}

#[test]
fn one_persons_weigh_ins_in_two_folders_are_not_counted_twice() {
    let t = ProgramTest::demo(5);
    let out = out_dir(&t);
    // A participant enrolled again under a new id, their folder copied: the group counted
    // one person as two, without a word.
    let copy = t.dir.join("participants/SG-006");
    fs::create_dir(&copy).unwrap();
    for e in fs::read_dir(t.dir.join("participants/SG-002")).unwrap() {
        let e = e.unwrap();
        fs::copy(e.path(), copy.join(e.file_name())).unwrap();
    }
    let profile = copy.join("profile.yaml");
    let p = fs::read_to_string(&profile).unwrap();
    fs::write(&profile, p.replace("id: SG-002", "id: SG-006")).unwrap();
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(check.code, 4, "{check:?}");
    assert!(
        check.stdout.contains(
            "error: participants/SG-006/weights.csv: the same weigh-ins as \
             participants/SG-002/weights.csv (the files are identical)"
        ),
        "{}",
        check.stdout
    );
    let o = run(&t, "html");
    assert_eq!(o.code, 4, "{o:?}");
    assert!(out.join("participants/SG-002.html").exists());
    assert!(out.join("participants/SG-006.html").exists());
    assert_eq!(
        left_out_note(&out),
        "Some participant folders could not be used because of input errors and are not counted here; the program staff&#x27;s data-quality list (metrics/data-quality.csv, identified: not for the sponsor) names them and the problems."
    );
    let dq = fs::read_to_string(out.join("metrics/data-quality.csv")).unwrap();
    let rows: Vec<&str> = dq
        .lines()
        .filter(|l| l.contains("the same weigh-ins as"))
        .map(|l| l.split(',').nth(1).unwrap())
        .collect();
    assert_eq!(rows, ["SG-002", "SG-006"]);
    // The staff's list names both folders on each row: the row's own file, and the other in
    // its message and `found`.
    for (own, other) in [("SG-002", "SG-006"), ("SG-006", "SG-002")] {
        let row = dq
            .lines()
            .find(|l| l.starts_with(&format!("error,{own},")) && l.contains("the same weigh-ins"))
            .unwrap();
        assert!(
            row.starts_with(&format!(
                "error,{own},participants/{own}/weights.csv,,,,the same weigh-ins as \
                 participants/{other}/weights.csv (the files are identical)"
            )),
            "{row}"
        );
        assert!(
            row.contains(&format!(",a copy of participants/{other}/weights.csv,")),
            "{row}"
        );
    }
    // Each of the two reports says why at its top — before the figures, and without the other
    // folder's id (another person's id in this one's report) — where it said nothing; the
    // other reports say nothing of it.
    let notice = "Please check these records with your program team";
    for (own, other) in [("SG-002", "SG-006"), ("SG-006", "SG-002")] {
        let html = fs::read_to_string(out.join(format!("participants/{own}.html"))).unwrap();
        let at = html
            .find(notice)
            .unwrap_or_else(|| panic!("{own}: no notice"));
        assert!(at < html.find("Where you stand").unwrap(), "{own}");
        assert!(
            html.contains("identical, entry for entry, to those in another participant")
                && html.contains("not counted in the group report"),
            "{own}"
        );
        assert!(!html.contains(other), "{own} names {other}");
        // Not also listed as a file "not used": the weigh-ins are used.
        assert!(!html.contains("without your weigh-ins"), "{own}");
    }
    let html = fs::read_to_string(out.join("participants/SG-003.html")).unwrap();
    assert!(!html.contains(notice));
    // The copy removed, an incremental run recomputes SG-002 (its own files did not change):
    // the notice goes, and SG-002 is counted again.
    fs::remove_dir_all(&copy).unwrap();
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        out.to_str().unwrap(),
        "--incremental",
    ]);
    assert_eq!(o.code, 0, "{o:?}");
    let html = fs::read_to_string(out.join("participants/SG-002.html")).unwrap();
    assert!(!html.contains(notice));
    assert_eq!(left_out_note(&out), "");
}

/// A copied folder whose own profile is broken: `run` leaves the other folder out of the group
/// and says so in its report, but `check` compared usable folders only and said nothing. Both
/// now name the copy, with the same exit code.
#[test]
fn check_names_a_copy_whose_partner_has_a_broken_profile_as_run_does() {
    let t = ProgramTest::demo(3);
    let out = out_dir(&t);
    let copy = t.dir.join("participants/SG-006");
    fs::create_dir(&copy).unwrap();
    fs::copy(
        t.dir.join("participants/SG-002/weights.csv"),
        copy.join("weights.csv"),
    )
    .unwrap();
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(check.code, 4, "{check:?}");
    assert!(
        check.stdout.contains(
            "error: participants/SG-002/weights.csv: the same weigh-ins as \
             participants/SG-006/weights.csv (the files are identical)"
        ),
        "{}",
        check.stdout
    );
    let o = run(&t, "html");
    assert_eq!(o.code, check.code, "{o:?}");
    let html = fs::read_to_string(out.join("participants/SG-002.html")).unwrap();
    assert!(html.contains("Please check these records with your program team"));
}

/// `--only` a folder whose weigh-ins are a copy of a folder outside the selection: its report
/// still says so (the copies are found over every folder of the program).
#[test]
fn a_copy_outside_an_only_selection_is_still_named_in_the_report() {
    let t = ProgramTest::demo(3);
    let out = out_dir(&t);
    let copy = t.dir.join("participants/SG-006");
    fs::create_dir(&copy).unwrap();
    for e in fs::read_dir(t.dir.join("participants/SG-002")).unwrap() {
        let e = e.unwrap();
        fs::copy(e.path(), copy.join(e.file_name())).unwrap();
    }
    let profile = copy.join("profile.yaml");
    let p = fs::read_to_string(&profile).unwrap();
    fs::write(&profile, p.replace("id: SG-002", "id: SG-006")).unwrap();
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        out.to_str().unwrap(),
        "--only",
        "SG-002",
    ]);
    assert_eq!(o.code, 4, "{o:?}");
    let html = fs::read_to_string(out.join("participants/SG-002.html")).unwrap();
    assert!(html.contains("Please check these records with your program team"));
    assert!(!out.join("participants/SG-006.html").exists());
}

#[test]
fn ids_that_differ_only_in_case_are_both_left_out() {
    let t = ProgramTest::demo(3);
    let out = out_dir(&t);
    // The same person exported twice, once with a lowercase id: on a case-insensitive output
    // (a Windows or macOS share) both reports have one name, and the group counts them twice.
    let copy = t.dir.join("participants/sg-002");
    fs::create_dir(&copy).unwrap();
    for e in fs::read_dir(t.dir.join("participants/SG-002")).unwrap() {
        let e = e.unwrap();
        fs::copy(e.path(), copy.join(e.file_name())).unwrap();
    }
    let profile = copy.join("profile.yaml");
    let p = fs::read_to_string(&profile).unwrap();
    fs::write(&profile, p.replace("id: SG-002", "id: sg-002")).unwrap();
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(check.code, 4, "{check:?}");
    assert!(
        check
            .stdout
            .contains("participant folders `SG-002`, `sg-002` differ only in upper and lower case"),
        "{}",
        check.stdout
    );
    let o = run(&t, "html");
    assert_eq!(o.code, 4, "{o:?}");
    let mut reports: Vec<String> = fs::read_dir(out.join("participants"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    reports.sort();
    assert_eq!(reports, ["SG-001.html", "SG-003.html"]);
}

#[test]
fn a_file_saved_as_unicode_text_is_read_like_utf8() {
    let t = ProgramTest::demo(2);
    let as_of = chrono::NaiveDate::parse_from_str(AS_OF, "%Y-%m-%d").unwrap();
    let weigh_ins = |dir: &Path| -> (usize, usize) {
        let r = cohortpress::check::check_program(dir, as_of);
        let p = r.participants.iter().find(|p| p.id == "SG-001").unwrap();
        let n = p.data.as_ref().unwrap().weights.len();
        let errors = r
            .participants
            .iter()
            .flat_map(|p| &p.diagnostics)
            .filter(|d| d.severity == cohortpress::diag::Severity::Error)
            .count();
        (n, errors)
    };
    let (n, errors) = weigh_ins(&t.dir);
    assert!(n > 20, "{n}");
    assert_eq!(errors, 0);
    // A spreadsheet's "Unicode text": UTF-16 little-endian with its byte-order mark, tabs and
    // CRLF; and a big-endian profile.
    let w = t.dir.join("participants/SG-001/weights.csv");
    let text = fs::read_to_string(&w)
        .unwrap()
        .replace(',', "\t")
        .replace('\n', "\r\n");
    let le: Vec<u8> = [0xFF, 0xFE]
        .into_iter()
        .chain(text.encode_utf16().flat_map(u16::to_le_bytes))
        .collect();
    fs::write(&w, le).unwrap();
    let pf = t.dir.join("participants/SG-001/profile.yaml");
    let profile = fs::read_to_string(&pf).unwrap();
    let be: Vec<u8> = [0xFE, 0xFF]
        .into_iter()
        .chain(profile.encode_utf16().flat_map(u16::to_be_bytes))
        .collect();
    fs::write(&pf, be).unwrap();
    // It was refused ("it may be UTF-16 or binary"): every weigh-in and the participant lost.
    assert_eq!(weigh_ins(&t.dir), (n, 0));
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert!(
        check.stdout.contains("read as UTF-16 little-endian text"),
        "{}",
        check.stdout
    );
}

/// UTF-16 without a byte-order mark was recognised only when nearly every character was Latin
/// (a zero byte in 90 % of the pairs): a profile with a Greek name, or a sessions file with
/// Cyrillic session names, was refused ("it may be UTF-16 or binary") and the participant lost.
/// The line ends tell the byte order whatever the script: U+000A is `0A 00` in little-endian
/// and `00 0A` in big-endian, and the other reading of either is U+0A00, which Unicode does not
/// assign (Python 3.11 `unicodedata`, Unicode 14.0: category Cn). How it was read is noted.
#[test]
fn unicode_text_without_a_byte_order_mark_in_other_scripts_is_read() {
    let t = ProgramTest::demo(2);
    let as_of = chrono::NaiveDate::parse_from_str(AS_OF, "%Y-%m-%d").unwrap();
    let folder = t.dir.join("participants/SG-001");
    let sessions_csv = fs::read_to_string(folder.join("sessions.csv")).unwrap();
    let sessions_before = sessions_csv.lines().count() - 1;
    assert!(sessions_before > 5, "{sessions_csv}");
    // Session names in Cyrillic, the file in UTF-16 big-endian without a mark.
    let mut rows = sessions_csv.lines();
    let mut cyrillic = format!("{}\n", rows.next().unwrap());
    for (i, row) in rows.enumerate() {
        let cells: Vec<&str> = row.split(',').collect();
        cyrillic.push_str(&format!(
            "{},Занятие {} «Отправная точка»,{}\n",
            cells[0],
            i + 1,
            cells[2]
        ));
    }
    let be: Vec<u8> = cyrillic.encode_utf16().flat_map(u16::to_be_bytes).collect();
    fs::write(folder.join("sessions.csv"), be).unwrap();
    // A Greek name (and a CJK comment) in profile.yaml, little-endian without a mark.
    let profile = fs::read_to_string(folder.join("profile.yaml")).unwrap();
    let name = "Αικατερίνη Παπαδοπούλου-Καραγιάννη";
    let profile: String = profile
        .lines()
        .map(|l| {
            if l.starts_with("name:") {
                format!("name: \"{name}\"\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    let profile = format!("# 参加者の記録 · Καρτέλα συμμετέχοντος\n{profile}");
    assert!(profile.contains(name), "the demo profile has a name line");
    let le: Vec<u8> = profile.encode_utf16().flat_map(u16::to_le_bytes).collect();
    fs::write(folder.join("profile.yaml"), le).unwrap();

    let r = cohortpress::check::check_program(&t.dir, as_of);
    let p = r.participants.iter().find(|p| p.id == "SG-001").unwrap();
    assert_eq!(p.diagnostics, [], "nothing refused");
    let data = p.data.as_ref().expect("the participant is usable");
    assert_eq!(data.profile.name.as_deref(), Some(name));
    assert_eq!(data.sessions.len(), sessions_before);
    assert_eq!(data.sessions[0].session, "Занятие 1 «Отправная точка»");
    let notes: Vec<String> = p
        .notes
        .iter()
        .map(|n| format!("{}: {}", n.file, n.message))
        .collect();
    assert!(
        notes.contains(
            &"participants/SG-001/profile.yaml: read as UTF-16 little-endian (without a byte-order mark) text"
                .to_string()
        ),
        "{notes:?}"
    );
    assert!(
        notes.contains(
            &"participants/SG-001/sessions.csv: read as UTF-16 big-endian (without a byte-order mark) text"
                .to_string()
        ),
        "{notes:?}"
    );
}

#[test]
fn input_files_named_in_other_case_are_read() {
    let t = ProgramTest::demo(2);
    let as_of = chrono::NaiveDate::parse_from_str(AS_OF, "%Y-%m-%d").unwrap();
    let load = |dir: &Path| {
        let r = cohortpress::check::check_program(dir, as_of);
        r.participants
            .into_iter()
            .find(|p| p.id == "SG-001")
            .unwrap()
    };
    let p = load(&t.dir);
    let n = p.data.as_ref().unwrap().weights.len();
    assert!(n > 20, "{n}");
    // Saved by a system that capitalises names: the weigh-ins were ignored ("not an input file
    // the tool reads"), and without profile.yaml the participant was left out.
    let folder = t.dir.join("participants/SG-001");
    fs::rename(folder.join("weights.csv"), folder.join("Weights.CSV")).unwrap();
    fs::rename(folder.join("profile.yaml"), folder.join("PROFILE.YAML")).unwrap();
    let p = load(&t.dir);
    assert_eq!(p.data.as_ref().map(|d| d.weights.len()), Some(n));
    assert!(p.diagnostics.is_empty(), "{:?}", p.diagnostics);
    let notes: Vec<&str> = p.notes.iter().map(|n| n.message.as_str()).collect();
    assert!(
        notes.contains(&"`Weights.CSV` read as `weights.csv` (the name differs only in case)"),
        "{notes:?}"
    );
    assert_eq!(p.files[0].path, "participants/SG-001/PROFILE.YAML");
    // Two names for one input: neither is read, both are named.
    fs::write(folder.join("WEIGHTS.csv"), "date,weight,unit\n").unwrap();
    let p = load(&t.dir);
    assert_eq!(p.data.as_ref().map(|d| d.weights.len()), Some(0));
    let stray: Vec<&str> = p.diagnostics.iter().map(|d| d.file.as_str()).collect();
    assert_eq!(
        stray,
        [
            "participants/SG-001/WEIGHTS.csv",
            "participants/SG-001/Weights.CSV"
        ]
    );
}

#[test]
fn a_participant_named_like_a_windows_device_is_left_out() {
    let t = ProgramTest::demo(3);
    let out = out_dir(&t);
    // `Com1`: its report `Com1.html` cannot be created on a Windows share, which failed the
    // whole run (exit 6) there.
    let folder = t.dir.join("participants/Com1");
    fs::rename(t.dir.join("participants/SG-003"), &folder).unwrap();
    let profile = folder.join("profile.yaml");
    let p = fs::read_to_string(&profile).unwrap();
    fs::write(&profile, p.replace("id: SG-003", "id: Com1")).unwrap();
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(check.code, 4, "{check:?}");
    assert!(
        check
            .stdout
            .contains("participants/Com1: the folder name is a device name on Windows"),
        "{}",
        check.stdout
    );
    let o = run(&t, "html");
    assert_eq!(o.code, 4, "{o:?}");
    assert!(out.join("participants/SG-001.html").exists());
    assert!(!out.join("participants/Com1.html").exists());
}

/// `--out` naming a mount point: a USB stick or share mounted at `/media/reports`, or a
/// container's volume (`-v /srv/out:/out`, `--out /out`). Every run computed every participant,
/// recorded its release in the ledger, and then failed at the swap with "Device or resource
/// busy (os error 16)", exit 6, month after month. Now refused before anything is done, naming
/// a folder inside it. Needs the right to mount (root, as in the project's test machine);
/// skipped with a message without it.
#[test]
fn an_output_folder_that_is_a_mount_point_is_refused_before_anything_is_done() {
    let t = ProgramTest::fixture("report-small");
    let out = out_dir(&t);
    fs::create_dir(&out).unwrap();
    let Some(_tmpfs) = crate::harness::Tmpfs::mount(&out) else {
        return;
    };
    let o = run(&t, "html");
    assert_eq!(o.code, 2, "{o:?}");
    assert!(
        o.stderr.contains("it is a mount point") && o.stderr.contains("name a folder inside it"),
        "{}",
        o.stderr
    );
    assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
    assert_eq!(
        fs::read_dir(&out).unwrap().count(),
        0,
        "nothing written in it"
    );
    let parent = out.parent().unwrap();
    assert!(!parent.join("out.ledger").exists(), "no release recorded");
    assert!(
        !t.dir.join("reports.ledger").exists(),
        "no release recorded"
    );
    // A folder inside it works.
    let inside = out.join("reports");
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
    assert_eq!(o.code, 0, "{o:?}");
    assert!(inside.join("group/program.html").is_file());
}

/// `--out` through a file (`--out notes.txt/reports`, a file where the path needs a folder):
/// `run` stopped with "writing outputs failed: …: Not a directory (os error 20)", exit 6, as a
/// full disk does, and `check` with the same `--out` said nothing (exit 0). Both now refuse it
/// as a wrong command line (exit 2), naming the file, and nothing is written.
#[test]
fn an_output_folder_under_a_file_is_refused_naming_the_file() {
    let t = ProgramTest::fixture("report-small");
    let file = t.dir.parent().unwrap().join("notes.txt");
    fs::write(&file, "mine\n").unwrap();
    let out = file.join("reports");
    let out_s = out.to_str().unwrap();
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        out_s,
    ]);
    assert_eq!(o.code, 2, "{o:?}");
    let named = format!("{} is a file, not a folder", file.display());
    assert!(o.stderr.contains(&named), "{}", o.stderr);
    assert!(!o.stderr.contains("os error"), "{}", o.stderr);
    assert!(!o.stderr.contains("participants, period"), "{}", o.stderr);
    let c = t.run(&["check", "{dir}", "--as-of", AS_OF, "--out", out_s]);
    assert_eq!(c.code, 2, "{c:?}");
    assert!(c.stdout.contains(&named), "{c:?}");
    assert_eq!(fs::read_to_string(&file).unwrap(), "mine\n");
    assert!(
        !t.dir.join("reports.ledger").exists(),
        "no release recorded"
    );
}

/// `report.out` through a file (`out: afile/reports`, `afile` a file in the program folder) and
/// no `--state`: the run looked for the program's own ledger beside `report.out` first and
/// stopped on it, "group-report ledger: …/afile/reports.ledger: Not a directory (os error
/// 20)", exit 6 (a failed write), while `check` named the file (exit 3). The output folder is
/// now checked first: the run gives `check`'s message at `report.out`'s line and column, exit 3
/// (program.yaml named it); `--out afile/sub` gives the same words, exit 2, from both.
#[test]
fn a_report_out_under_a_file_is_refused_naming_the_file_before_the_ledger() {
    let t = ProgramTest::fixture("report-small");
    let file = t.dir.join("afile");
    fs::write(&file, "mine\n").unwrap();
    let yaml = t.dir.join("program.yaml");
    let text = fs::read_to_string(&yaml).unwrap();
    let edited = text.replace("  out: reports", "  out: afile/reports");
    assert_ne!(edited, text);
    fs::write(&yaml, &edited).unwrap();
    let line = edited
        .lines()
        .position(|l| l == "  out: afile/reports")
        .unwrap()
        + 1;
    let at = format!("program.yaml:{line}:8: refusing to write the output to ");
    let named = "afile is a file, not a folder, so no folder can be made inside it";
    let run = t.run(&["run", "{dir}", "--as-of", AS_OF, "--formats", "html"]);
    assert_eq!(run.code, 3, "{run:?}");
    assert!(run.stderr.contains(&at), "{}", run.stderr);
    assert!(run.stderr.contains(named), "{}", run.stderr);
    assert!(!run.stderr.contains("ledger"), "{}", run.stderr);
    assert!(!run.stderr.contains("os error"), "{}", run.stderr);
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(check.code, 3, "{check:?}");
    assert!(
        check.stdout.contains(&at) && check.stdout.contains(named),
        "{check:?}"
    );

    // Named on the command line: the same words, exit 2, also with report.out under the file.
    let sub = file.join("sub");
    let sub = sub.to_str().unwrap();
    let run = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--out",
        sub,
    ]);
    assert_eq!(run.code, 2, "{run:?}");
    assert!(run.stderr.contains("(--out): "), "{}", run.stderr);
    assert!(run.stderr.contains(named), "{}", run.stderr);
    assert!(!run.stderr.contains("os error"), "{}", run.stderr);
    let check = t.run(&["check", "{dir}", "--as-of", AS_OF, "--out", sub]);
    assert_eq!(check.code, 2, "{check:?}");
    assert!(check.stdout.contains(named), "{check:?}");
    assert_eq!(fs::read_to_string(&file).unwrap(), "mine\n");
}

/// `~` that no shell expanded: `--out "~/reports"` quoted in a cron line, or `out: ~/reports`
/// in program.yaml. The reports went into a folder named `~` in the working (or program)
/// folder, with no word; a later `rm -r ~` to tidy it up is the user's home folder.
#[test]
fn a_path_starting_with_a_tilde_is_refused_not_made_into_a_folder_named_tilde() {
    let t = ProgramTest::fixture("report-small");
    for (option, code) in [("--out", 2), ("--state", 2)] {
        let o = t.run(&["run", "{dir}", "--as-of", AS_OF, option, "~/reports"]);
        assert_eq!(o.code, code, "{option}: {o:?}");
        assert!(
            o.stderr
                .contains(&format!("{option} ~/reports: the path starts with `~`")),
            "{}",
            o.stderr
        );
        assert!(!t.dir.join("~").exists());
    }
    let yaml = t.dir.join("program.yaml");
    let text = fs::read_to_string(&yaml).unwrap();
    fs::write(&yaml, text.replace("  out: reports", "  out: ~/reports")).unwrap();
    for command in ["run", "check"] {
        let o = t.run(&[command, "{dir}", "--as-of", AS_OF]);
        assert_eq!(o.code, 3, "{command}: {o:?}");
        assert!(
            format!("{}{}", o.stdout, o.stderr).contains("the path starts with `~`"),
            "{command}: {o:?}"
        );
        assert!(!t.dir.join("~").exists());
    }
}

/// The longest run of digits in `s`.
fn longest_digit_run(s: &str) -> usize {
    s.split(|c: char| !c.is_ascii_digit())
        .map(str::len)
        .max()
        .unwrap_or(0)
}

/// A weight, an intake and a lab value of 1e308 written out (309 digits, as a spreadsheet
/// exports a number typed with an exponent) and a program target of `1e308`: every message
/// quoted the number in full — hundreds of zeros in `check`'s lines, the JSON, the participant's
/// report and the data-quality list. Each is shown by its first and last digits and its length,
/// and the YAML float as `1e308`.
#[test]
fn a_number_of_hundreds_of_digits_is_shown_compactly() {
    let t = ProgramTest::fixture("report-small");
    let big = format!("1{}", "0".repeat(308));
    let p = t.dir.join("participants/SG-003");
    let append = |file: &str, row: String| {
        let mut text = fs::read_to_string(p.join(file)).unwrap();
        text.push_str(&row);
        fs::write(p.join(file), text).unwrap();
    };
    append("weights.csv", format!("2026-09-09,{big},lb,home-scale\n"));
    append("intake.csv", format!("2026-09-09,{big}\n"));
    append("labs.csv", format!("2026-09-09,hba1c,{big},%\n"));
    for format in ["text", "json"] {
        let c = t.run(&["check", "{dir}", "--as-of", AS_OF, "--format", format]);
        assert_eq!(c.code, 1, "{c:?}");
        assert!(longest_digit_run(&c.stdout) <= 24, "{}", c.stdout);
        // The weight's, the lab value's and the intake's, each found as compacted.
        assert!(
            c.stdout.matches("100000…000 (309 digits)").count() >= 3,
            "{format}: {}",
            c.stdout
        );
    }
    let o = run(&t, "html");
    assert_eq!(o.code, 1, "{o:?}");
    let out = out_dir(&t);
    for file in ["participants/SG-003.html", "metrics/data-quality.csv"] {
        let text = fs::read_to_string(out.join(file)).unwrap();
        assert!(longest_digit_run(&text) <= 24, "{file}");
        assert!(text.contains("(309 digits)"), "{file}");
    }
    // A target in program.yaml read as a YAML float.
    let yaml = fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace("weight_change_percent: -5", "weight_change_percent: 1e308");
    fs::write(t.dir.join("program.yaml"), yaml).unwrap();
    let c = t.run(&["check", "{dir}", "--as-of", AS_OF]);
    assert_eq!(c.code, 3, "{c:?}");
    assert!(
        c.stdout.contains("target out of range: 1e308") && c.stdout.contains("found: 1e308"),
        "{}",
        c.stdout
    );
}

/// `check --out DIR` with DIR on a file system mounted read-only (a restored backup, a share
/// mounted `ro`), the ledger named elsewhere with `--state`: `check` said ok (exit 0), and the
/// run stopped at its lock file, "Read-only file system", exit 6. `check` now names the folder
/// and exits 6 as the run does, for a folder there already and for a new one, and for
/// `report.out` too. Needs the right to mount (root, as on the project's test machine); skipped
/// with a message without it. (Root ignores permission bits, so a folder without write
/// permission is not tested here; `access(2)` judges both alike.)
#[test]
fn check_says_an_output_folder_on_a_read_only_file_system_cannot_be_written() {
    let t = ProgramTest::fixture("report-small");
    let mnt = t.dir.parent().unwrap().join("ro");
    fs::create_dir(&mnt).unwrap();
    let Some(tmpfs) = crate::harness::Tmpfs::mount(&mnt) else {
        return;
    };
    fs::create_dir(mnt.join("reports")).unwrap();
    tmpfs.make_read_only();
    let state = t.dir.parent().unwrap().join("state");
    let state = state.to_str().unwrap();
    for out in [mnt.join("reports"), mnt.join("new/reports")] {
        let out = out.to_str().unwrap();
        let c = t.run(&[
            "check", "{dir}", "--as-of", AS_OF, "--out", out, "--state", state,
        ]);
        assert_eq!(c.code, 6, "{out}: {c:?}");
        assert!(
            c.stdout.contains(&format!(
                "error: {}: the output folder (--out) cannot be written here (Read-only file system",
                mnt.display()
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
            out,
            "--state",
            state,
        ]);
        assert_eq!(r.code, c.code, "{out}: {r:?}");
    }
    // report.out in program.yaml.
    let yaml = fs::read_to_string(t.dir.join("program.yaml")).unwrap();
    let yaml = yaml.replace(
        "out: reports",
        &format!("out: {}", mnt.join("reports").display()),
    );
    fs::write(t.dir.join("program.yaml"), yaml).unwrap();
    let c = t.run(&["check", "{dir}", "--as-of", AS_OF, "--state", state]);
    assert_eq!(c.code, 6, "{c:?}");
    assert!(
        c.stdout
            .contains("the output folder (report.out) cannot be written"),
        "{}",
        c.stdout
    );
    // A writable folder is still fine.
    let ok = t.dir.parent().unwrap().join("fine");
    let c = t.run(&[
        "check",
        "{dir}",
        "--as-of",
        AS_OF,
        "--out",
        ok.to_str().unwrap(),
        "--state",
        state,
    ]);
    assert_eq!(c.code, 0, "{c:?}");
}

/// An output folder whose name is not UTF-8 (a Latin-1 `é` from an old script: byte 0xE9): its
/// lock file, staging folder, previous copy and ledger were named from the name's text, with
/// U+FFFD for the byte, so `rapport\xe9` and `rapport\xe8` shared one lock, one staging folder,
/// one previous copy and one ledger, none of them `<out>.ledger`. Named byte for byte now. (A
/// new ledger is the program's own, made by the first run and used by the second; the ledger an
/// output folder already has, `<out>.ledger` beside it, is found under its name byte for byte:
/// with both folders' ledgers there, a name read as `rapport\u{fffd}.ledger` would find none of
/// its own and two beside it, and stop with exit 2.)
#[test]
fn an_output_folder_name_that_is_not_utf8_gets_files_of_its_own() {
    use std::os::unix::ffi::OsStrExt;
    let t = ProgramTest::fixture("report-small");
    let parent = t.dir.parent().unwrap().to_path_buf();
    let name = |b: u8| {
        let mut v = b"rapport".to_vec();
        v.push(b);
        std::ffi::OsStr::from_bytes(&v).to_os_string()
    };
    let ledger_of = |b: u8| {
        let mut ledger = name(b);
        ledger.push(".ledger");
        parent.join(ledger)
    };
    let run = |b: u8| {
        let out = parent.join(name(b));
        t.run_os(&[
            "run".as_ref(),
            "{dir}".as_ref(),
            "--as-of".as_ref(),
            AS_OF.as_ref(),
            "--formats".as_ref(),
            "html".as_ref(),
            "--out".as_ref(),
            out.as_os_str(),
        ])
    };
    let programs = t.dir.join("reports.ledger");
    for b in [0xe9, 0xe8] {
        let o = run(b);
        assert_eq!(o.code, 0, "{o:?}");
        assert!(programs.join("ledger.json").is_file(), "{o:?}");
        assert!(!ledger_of(b).exists());
        let mut lock = std::ffi::OsString::from(".");
        lock.push(name(b));
        lock.push(".lock");
        assert!(parent.join(&lock).is_file());
    }
    // Each output folder's own ledger, beside it (as an earlier version made them).
    std::fs::create_dir(ledger_of(0xe8)).unwrap();
    for f in ["ledger.json", "secret.key"] {
        std::fs::copy(programs.join(f), ledger_of(0xe8).join(f)).unwrap();
    }
    std::fs::rename(&programs, ledger_of(0xe9)).unwrap();
    for b in [0xe9, 0xe8] {
        let o = run(b);
        assert_eq!(o.code, 0, "{o:?}");
        assert!(!programs.exists(), "{o:?}");
    }
    let real: Vec<_> = fs::read_dir(&parent)
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .filter(|n| n.as_bytes().contains(&0xef))
        .collect();
    assert!(real.is_empty(), "a name with U+FFFD written: {real:?}");
}

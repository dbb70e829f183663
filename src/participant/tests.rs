use super::*;
use std::fs;
use std::path::Path;

const PROGRAM: &str = "format_version: 1
program: { id: demo-2026, title: \"Demo\", start: 2026-04-01, end: 2026-09-30 }
modules: [ {id: trend} ]
";

const PROFILE: &str = "id: P1
sex: male
age: 50
height: 180 cm
enrolled: 2026-04-01
";

fn program(root: &Path) -> Program {
    fs::write(root.join("program.yaml"), PROGRAM).unwrap();
    crate::program::load_program(root).unwrap()
}

fn as_of() -> NaiveDate {
    NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()
}

fn participant(root: &Path, id: &str, files: &[(&str, &[u8])]) -> ParticipantDir {
    let dir = root.join("participants").join(id);
    fs::create_dir_all(&dir).unwrap();
    for (name, bytes) in files {
        fs::write(dir.join(name), bytes).unwrap();
    }
    ParticipantDir {
        id: id.into(),
        path: dir,
    }
}

/// Something else under the name `participants` is named for what it is: a file or a link to
/// nothing was reported as "the participants folder does not exist".
#[test]
fn a_participants_file_or_dangling_link_is_named_for_what_it_is() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let base = tmp.path().join("participants");
    fs::write(&base, "SG-001\n").unwrap();
    let (dirs, diags) = discover(&p);
    assert!(dirs.is_empty());
    assert_eq!(diags.len(), 1);
    assert_eq!(
        diags[0].message,
        "`participants` is a regular file, not a folder"
    );
    assert_eq!(diags[0].found.as_deref(), Some("a regular file"));
    assert!(is_folder_error(&diags[0]));
    fs::remove_file(&base).unwrap();
    #[cfg(unix)]
    {
        std::os::unix::fs::symlink(tmp.path().join("share/participants"), &base).unwrap();
        let (_, diags) = discover(&p);
        assert_eq!(
            diags[0].message,
            "`participants` is a symbolic link to a folder that does not exist (a share not \
             mounted?), not a folder"
        );
    }
}

#[test]
fn discovery_is_sorted_and_refuses_bad_names() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let (dirs, diags) = discover(&p);
    assert!(dirs.is_empty());
    assert_eq!(diags[0].severity, Severity::Error);
    assert!(diags[0].message.contains("does not exist"));

    let base = tmp.path().join("participants");
    for name in [
        "b-2",
        "A_1",
        "bad id",
        "a..b",
        ".hidden",
        "tab\tname",
        "ünï",
    ] {
        fs::create_dir_all(base.join(name)).unwrap();
    }
    fs::write(base.join("notes.txt"), "x").unwrap();
    #[cfg(unix)]
    std::os::unix::fs::symlink(base.join("b-2"), base.join("link")).unwrap();
    let (dirs, diags) = discover(&p);
    assert_eq!(
        dirs.iter().map(|d| d.id.as_str()).collect::<Vec<_>>(),
        vec!["A_1", "b-2"]
    );
    let errors: Vec<&str> = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .map(|d| d.file.as_str())
        .collect();
    #[cfg(unix)]
    assert_eq!(
        errors,
        vec![
            "participants/a..b",
            "participants/bad id",
            "participants/link",
            "participants/tab\\tname",
            "participants/ünï"
        ]
    );
    let warnings: Vec<&str> = diags
        .iter()
        .filter(|d| d.severity == Severity::Warning)
        .map(|d| d.file.as_str())
        .collect();
    #[cfg(unix)]
    assert_eq!(warnings, vec!["participants/notes.txt"]);
}

#[test]
fn clean_participant_is_usable_and_files_are_hashed() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights = b"date,weight,unit\n2026-04-02,90.5,kg\n2026-04-01,91,kg\n";
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", PROFILE.as_bytes()),
            ("weights.csv", weights),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.diagnostics.is_empty(), "{:#?}", lp.diagnostics);
    let data = lp.data.unwrap();
    assert_eq!(data.weights.len(), 2);
    assert_eq!(data.baseline_weight().unwrap().weight.kg(), 91.0);
    assert_eq!(data.profile.height.cm(), 180.0);
    assert_eq!(lp.files.len(), 2);
    assert_eq!(lp.files[1].path, "participants/P1/weights.csv");
    assert_eq!(
        lp.files[1].blake3,
        blake3::hash(weights).to_hex().to_string()
    );
    assert_eq!(lp.files[1].bytes, weights.len() as u64);
}

#[test]
fn missing_profile_makes_the_participant_unusable() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let dir = participant(
        tmp.path(),
        "P1",
        &[("weights.csv", b"date,weight,unit\n2027-01-01,72,kg\n")],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.data.is_none());
    assert!(lp.has_errors());
    let e = lp
        .diagnostics
        .iter()
        .find(|d| d.severity == Severity::Error)
        .unwrap();
    assert_eq!(e.file, "participants/P1/profile.yaml");
    assert!(e.message.contains("no profile.yaml"), "{e}");
    // The CSV files are still checked (here: a future date).
    assert!(
        lp.diagnostics
            .iter()
            .any(|d| d.message.contains("in the future"))
    );
}

#[test]
fn non_utf8_file_is_an_error_naming_line_and_byte() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", PROFILE.as_bytes()),
            (
                "activity.csv",
                b"date,activity,minutes\n2026-04-01,caf\x81 walk,30\n",
            ),
            ("weights.csv", b"date,weight,unit\n2026-04-02,80,kg\n"),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    // The file is lost, not the participant.
    assert_eq!(lp.data.as_ref().unwrap().weights.len(), 1);
    assert!(lp.data.as_ref().unwrap().activity.is_empty());
    assert_eq!(lp.diagnostics.len(), 1, "{:#?}", lp.diagnostics);
    let e = &lp.diagnostics[0];
    assert_eq!(e.severity, Severity::Error);
    assert_eq!(e.file, "participants/P1/activity.csv");
    assert_eq!((e.line, e.column), (Some(2), Some(15)));
    assert!(e.found.as_deref().unwrap().contains("0x81"));
    assert!(
        e.hint
            .as_deref()
            .unwrap()
            .contains("save the file as UTF-8"),
        "{e}"
    );
    assert_eq!(e.participant.as_deref(), Some("P1"));
    // Files are hashed even when unusable: the manifest records what was read.
    assert_eq!(lp.files.len(), 3);
}

#[test]
fn a_windows_1252_profile_is_read_with_a_warning() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    // "Zoë Müller" in Windows-1252: ë = 0xEB, ü = 0xFC.
    let mut bytes = format!("{PROFILE}name: Zo").into_bytes();
    bytes.extend_from_slice(b"\xEB M\xFCller\n");
    let dir = participant(tmp.path(), "P1", &[("profile.yaml", &bytes)]);
    let lp = load_participant(&p, &dir, as_of());
    assert_eq!(lp.diagnostics.len(), 1, "{:#?}", lp.diagnostics);
    assert_eq!(lp.diagnostics[0].severity, Severity::Warning);
    assert!(
        lp.diagnostics[0].message.contains("Windows-1252"),
        "{}",
        lp.diagnostics[0]
    );
    assert!(
        lp.diagnostics[0]
            .hint
            .as_deref()
            .is_some_and(|h| h.contains("input.encoding: windows-1252")),
        "{}",
        lp.diagnostics[0]
    );
    assert_eq!(lp.data.unwrap().profile.name.as_deref(), Some("Zoë Müller"));
}

/// A spreadsheet's CSV saved on Windows (CRLF, Windows-1252) is read with a warning located at
/// its first byte that is not UTF-8, naming the character it was read as: the warning named
/// the characters but not where one was, with no expected or found.
#[test]
fn a_windows_1252_csv_file_is_warned_about_at_its_first_such_byte() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    // "pesée" in Windows-1252: é = 0xE9, on line 3 after `2026-04-03;72,1;pes`.
    let bytes = b"Date;Weight (kg);Note\r\n2026-04-02;72,4;\r\n2026-04-03;72,1;pes\xE9e\r\n";
    let dir = participant(
        tmp.path(),
        "P1",
        &[("profile.yaml", PROFILE.as_bytes()), ("weights.csv", bytes)],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert_eq!(lp.data.as_ref().unwrap().weights.len(), 2);
    assert_eq!(lp.diagnostics.len(), 1, "{:#?}", lp.diagnostics);
    let w = &lp.diagnostics[0];
    assert!(w.message.contains("read as Windows-1252"), "{w}");
    assert_eq!((w.line, w.column), (Some(3), Some(20)), "{w}");
    assert_eq!(w.expected.as_deref(), Some("UTF-8 text"));
    assert_eq!(
        w.found.as_deref(),
        Some("byte 0xE9 at byte column 20, read as `é`")
    );
}

/// A program whose exports are always Windows-1252 (a French spreadsheet's "CSV") got the
/// warning for every such file in every monthly run, so every scheduled run ended with exit
/// code 1 (tryout23). `input.encoding: windows-1252` says they are expected: the same file is
/// read the same way, with a note and no warning; a UTF-8 file is still read as UTF-8.
#[test]
fn a_windows_1252_file_the_program_declares_is_read_with_a_note() {
    let tmp = tempfile::tempdir().unwrap();
    fs::write(
        tmp.path().join("program.yaml"),
        format!("{PROGRAM}input:\n  encoding: windows-1252\n"),
    )
    .unwrap();
    let p = crate::program::load_program(tmp.path()).unwrap();
    assert_eq!(
        p.def.input.encoding,
        crate::program::InputEncoding::Windows1252
    );
    let mut bytes = format!("{PROFILE}name: Zo").into_bytes();
    bytes.extend_from_slice(b"\xEB M\xFCller\n");
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", &bytes),
            (
                "weights.csv",
                "date,weight,unit\n2026-04-02,80,kg\n".as_bytes(),
            ),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.diagnostics.is_empty(), "{:#?}", lp.diagnostics);
    let notes: Vec<&str> = lp.notes.iter().map(|n| n.message.as_str()).collect();
    assert!(
        notes.contains(&"read as Windows-1252 (input.encoding), which gives `ë`, `ü`"),
        "{notes:#?}"
    );
    assert_eq!(lp.data.unwrap().profile.name.as_deref(), Some("Zoë Müller"));
    // An unknown encoding is refused at its line.
    fs::write(
        tmp.path().join("program.yaml"),
        format!("{PROGRAM}input:\n  encoding: koi8-r\n"),
    )
    .unwrap();
    let errs = crate::program::load_program(tmp.path()).expect_err("refused");
    let err = errs[0].to_string();
    assert!(
        err.contains("koi8-r") && err.contains("windows-1252"),
        "{err}"
    );
    assert_eq!(errs[0].line, Some(5), "{err}");
}

#[test]
fn links_fifos_and_directories_are_refused_naming_the_file() {
    // The folder listing decides which inputs exist; a link, a folder or a FIFO with an input's
    // name is an error naming it, and nothing is read through it.
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let dir = participant(tmp.path(), "P1", &[("profile.yaml", PROFILE.as_bytes())]);
    let elsewhere = tmp.path().join("weights-elsewhere.csv");
    fs::write(&elsewhere, "date,weight,unit\n2026-04-02,80,kg\n").unwrap();
    std::os::unix::fs::symlink(&elsewhere, dir.path.join("weights.csv")).unwrap();
    fs::create_dir(dir.path.join("intake.csv")).unwrap();
    let fifo = std::process::Command::new("mkfifo")
        .arg(dir.path.join("activity.csv"))
        .status()
        .unwrap();
    assert!(fifo.success());
    let loaded = load_participant(&p, &dir, as_of());
    let errors: Vec<(&str, &str)> = loaded
        .diagnostics
        .iter()
        .map(|d| {
            assert_eq!(d.severity, Severity::Error, "{d}");
            (d.file.as_str(), d.message.as_str())
        })
        .collect();
    assert_eq!(errors.len(), 3, "{errors:#?}");
    assert_eq!(errors[0].0, "participants/P1/activity.csv");
    assert!(
        errors[0]
            .1
            .contains("a FIFO (named pipe), not a regular file"),
        "{errors:?}"
    );
    assert_eq!(errors[1].0, "participants/P1/intake.csv");
    assert!(
        errors[1].1.contains("a folder, not a regular file"),
        "{errors:?}"
    );
    assert_eq!(errors[2].0, "participants/P1/weights.csv");
    assert!(errors[2].1.contains("symbolic link"), "{errors:?}");
    // Said as the other messages say it: expected and found, no parentheses within
    // parentheses ("cannot read the file (it is a folder, not a regular file; nothing was read
    // from it (put the file itself here))").
    let intake = &loaded.diagnostics[1];
    assert_eq!(
        intake.message,
        "cannot read the file: it is a folder, not a regular file; nothing was read from it"
    );
    assert_eq!(intake.expected.as_deref(), Some("a regular file"));
    assert_eq!(intake.found.as_deref(), Some("a folder"));
    assert!(
        intake
            .hint
            .as_deref()
            .is_some_and(|h| h.starts_with("put the file itself here; this file is left out")),
        "{intake}"
    );
    let weights = &loaded.diagnostics[2];
    assert_eq!(weights.found.as_deref(), Some("a symbolic link"));
    assert_eq!(weights.expected.as_deref(), Some("a regular file"));
    for d in &loaded.diagnostics {
        assert!(!d.message.contains("(put"), "{d}");
    }
    // Each bad file costs that file only: the participant stays usable (without data).
    assert!(loaded.data.as_ref().unwrap().weights.is_empty());
    // Only the profile was read.
    let read: Vec<&str> = loaded.files.iter().map(|f| f.path.as_str()).collect();
    assert_eq!(read, vec!["participants/P1/profile.yaml"]);

    // With real files in their place the participant is usable.
    for f in ["weights.csv", "activity.csv"] {
        fs::remove_file(dir.path.join(f)).unwrap();
    }
    fs::remove_dir(dir.path.join("intake.csv")).unwrap();
    fs::copy(&elsewhere, dir.path.join("weights.csv")).unwrap();
    let loaded = load_participant(&p, &dir, as_of());
    assert!(loaded.diagnostics.is_empty(), "{:#?}", loaded.diagnostics);
    let data = loaded.data.unwrap();
    assert_eq!(data.weights.len(), 1);
    assert_eq!(data.weights[0].weight.kg(), 80.0);
}

/// A socket under an input's name is named for what it is (attack22: opening one fails with
/// `ENXIO`, and the message read "No such device or address (os error 6)"); a profile that
/// cannot be read says that the participant is not reported (it said "the participant is
/// reported without it" beside "participant left out").
#[cfg(unix)]
#[test]
fn a_socket_is_named_and_an_unreadable_profile_leaves_the_participant_out() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let dir = participant(tmp.path(), "P1", &[("profile.yaml", PROFILE.as_bytes())]);
    let _socket = std::os::unix::net::UnixListener::bind(dir.path.join("labs.csv")).unwrap();
    let loaded = load_participant(&p, &dir, as_of());
    assert_eq!(loaded.diagnostics.len(), 1, "{:#?}", loaded.diagnostics);
    let d = &loaded.diagnostics[0];
    assert_eq!(d.file, "participants/P1/labs.csv");
    assert_eq!(
        d.message,
        "cannot read the file: it is a socket, not a regular file; nothing was read from it"
    );
    assert_eq!(d.found.as_deref(), Some("a socket"));
    assert!(loaded.data.is_some());

    let elsewhere = tmp.path().join("profile-elsewhere.yaml");
    fs::write(&elsewhere, PROFILE).unwrap();
    fs::remove_file(dir.path.join("profile.yaml")).unwrap();
    std::os::unix::fs::symlink(&elsewhere, dir.path.join("profile.yaml")).unwrap();
    let loaded = load_participant(&p, &dir, as_of());
    assert!(loaded.data.is_none());
    let d = loaded
        .diagnostics
        .iter()
        .find(|d| d.file == "participants/P1/profile.yaml")
        .unwrap();
    assert!(d.message.contains("symbolic link"), "{d}");
    assert_eq!(
        d.hint.as_deref(),
        Some(
            "put the file itself here; the participant is not reported until this file can be \
             read; other participants are not affected"
        )
    );
}

/// An input saved under a name that starts as its own (attack22): `weights.csv.txt` (a system
/// that hides extensions), `Weights.xlsx`, `weights.tsv`, `weights`, `weights.csv ` with a
/// space at its end, `.сsv` with a Cyrillic `с`, or a zero-width space in the name, was passed
/// over without a word while the folder had no `weights.csv`: the participant was reported
/// without weigh-ins and `check` had nothing to report. Each is now a warning saying which input
/// the folder lacks; beside the input itself such a name (`weights-2025.xlsx`) is left alone.
#[test]
fn an_input_saved_under_another_name_is_named_not_passed_over() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights: &[u8] = b"date,weight,unit\n2026-04-02,80,kg\n";
    for name in [
        "weights.csv.txt",
        "Weights.xlsx",
        "weights.tsv",
        "weights",
        "weights.csv ",
        "weights.\u{441}sv",
        "weights\u{200b}.csv",
    ] {
        let dir = participant(
            tmp.path(),
            "P1",
            &[("profile.yaml", PROFILE.as_bytes()), (name, weights)],
        );
        let loaded = load_participant(&p, &dir, as_of());
        assert!(loaded.data.as_ref().unwrap().weights.is_empty());
        assert_eq!(
            loaded.diagnostics.len(),
            1,
            "{name}: {:#?}",
            loaded.diagnostics
        );
        let d = &loaded.diagnostics[0];
        assert_eq!(d.severity, Severity::Warning);
        let shown = name.replace('\u{200b}', "\\u{200b}");
        assert_eq!(
            d.message,
            format!("`{shown}` is not an input file the tool reads; it is ignored")
        );
        assert_eq!(
            d.hint.as_deref(),
            Some(
                "this folder has no `weights.csv`: if this file holds it, save it as \
                 `weights.csv` (CSV text: comma-, semicolon- or tab-separated), named exactly so"
            ),
            "{name}"
        );
        fs::remove_file(dir.path.join(name)).unwrap();
    }
    // Beside the input itself, a file of another kind named like it is no one's business.
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", PROFILE.as_bytes()),
            ("weights.csv", weights),
            ("weights-2025.xlsx", b"PK"),
        ],
    );
    let loaded = load_participant(&p, &dir, as_of());
    assert!(loaded.diagnostics.is_empty(), "{:#?}", loaded.diagnostics);
    assert_eq!(loaded.data.unwrap().weights.len(), 1);
}

#[cfg(unix)]
#[test]
fn a_folder_swapped_for_a_link_after_listing_is_not_followed() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights: &[u8] = b"date,weight,unit\n2026-04-02,80,kg\n";
    let other_profile = PROFILE.replace("P1", "P2");
    let other = participant(
        tmp.path(),
        "P2",
        &[
            ("profile.yaml", other_profile.as_bytes()),
            ("weights.csv", weights),
        ],
    );
    let dir = participant(tmp.path(), "P1", &[("profile.yaml", PROFILE.as_bytes())]);
    // Listed as a real folder, then replaced by a link to P2's folder before it is read.
    let (dirs, _) = discover(&p);
    assert_eq!(dirs.len(), 2);
    fs::remove_dir_all(&dir.path).unwrap();
    std::os::unix::fs::symlink(&other.path, &dir.path).unwrap();
    let loaded = load_participant(&p, &dirs[0], as_of());
    assert_eq!(loaded.id, "P1");
    assert!(loaded.data.is_none());
    assert!(loaded.files.is_empty(), "{:?}", loaded.files);
    assert_eq!(loaded.diagnostics.len(), 1);
    let d = &loaded.diagnostics[0];
    assert_eq!(d.file, "participants/P1");
    assert!(d.message.contains("symbolic link"), "{d}");
}

#[test]
fn identical_weights_files_of_two_participants_are_errors_for_both() {
    let file = |id: &str, name: &str, hash: &str, bytes: u64| InputFile {
        path: format!("participants/{id}/{name}"),
        blake3: hash.into(),
        bytes,
    };
    let a = vec![
        file("A-1", "weights.csv", "h1", 400),
        file("A-1", "intake.csv", "i", 900),
    ];
    let b = vec![file("B-2", "Weights.CSV", "h1", 400)];
    let c = vec![file("C-3", "weights.csv", "h2", 400)];
    // Identical but short (one or two rows may coincide): not compared.
    let d = vec![file("D-4", "weights.csv", "h3", 60)];
    let e = vec![file("E-5", "weights.csv", "h3", 60)];
    // The same intake file alone is no evidence (several people may log nothing new).
    let f = vec![file("F-6", "intake.csv", "i", 900)];
    let got = same_weigh_ins([
        ("A-1", a.as_slice()),
        ("B-2", b.as_slice()),
        ("C-3", c.as_slice()),
        ("D-4", d.as_slice()),
        ("E-5", e.as_slice()),
        ("F-6", f.as_slice()),
    ]);
    let brief: Vec<(Option<&str>, &str, &str)> = got
        .iter()
        .map(|d| {
            (
                d.participant.as_deref(),
                d.file.as_str(),
                d.found.as_deref().unwrap(),
            )
        })
        .collect();
    assert_eq!(
        brief,
        [
            (
                Some("A-1"),
                "participants/A-1/weights.csv",
                "a copy of participants/B-2/Weights.CSV"
            ),
            (
                Some("B-2"),
                "participants/B-2/Weights.CSV",
                "a copy of participants/A-1/weights.csv"
            ),
        ]
    );
    assert!(got.iter().all(|d| d.severity == Severity::Error));
}

#[test]
fn a_height_that_gives_the_weigh_ins_an_impossible_bmi_is_an_error_at_its_line() {
    // 250 cm typed for 150 cm: each value is in range, the BMI of 61 kg at 2.5 m is 9.8, and
    // the report printed "BMI 9.8 … underweight" with a clinical flag.
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights = b"date,weight,unit\n2026-04-02,61.2,kg\n2026-04-09,60.9,kg\n2026-04-16,61.4,kg\n";
    let tall = PROFILE.replace("180 cm", "250 cm");
    let dir = participant(
        tmp.path(),
        "P1",
        &[("profile.yaml", tall.as_bytes()), ("weights.csv", weights)],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.data.is_none());
    assert_eq!(lp.diagnostics.len(), 1, "{:#?}", lp.diagnostics);
    let e = &lp.diagnostics[0];
    assert_eq!(e.severity, Severity::Error);
    assert_eq!(
        (e.file.as_str(), e.line),
        ("participants/P1/profile.yaml", Some(4))
    );
    assert_eq!(
        e.message,
        "a height of 250 cm with weigh-ins around 61.2 kg gives a BMI of 9.8, which no adult \
         has; the participant cannot be used"
    );
    // The same weigh-ins at 150 cm (BMI 27.2) are used.
    let fine = PROFILE.replace("180 cm", "150 cm");
    fs::write(dir.path.join("profile.yaml"), fine).unwrap();
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.diagnostics.is_empty(), "{:#?}", lp.diagnostics);
    assert_eq!(lp.data.unwrap().weights.len(), 3);
}

#[test]
fn an_enrolment_more_than_a_year_before_the_program_starts_is_an_error_at_its_line() {
    // `1926-04-01` for `2026-04-01`: every "since enrolment" figure ran over a century.
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights: &[u8] = b"date,weight,unit\n2026-04-02,80.1,kg\n2026-04-09,79.8,kg\n";
    let early = PROFILE.replace("enrolled: 2026-04-01", "enrolled: 2025-03-31");
    let dir = participant(
        tmp.path(),
        "P1",
        &[("profile.yaml", early.as_bytes()), ("weights.csv", weights)],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.data.is_none());
    assert_eq!(lp.diagnostics.len(), 1, "{:#?}", lp.diagnostics);
    let e = &lp.diagnostics[0];
    assert_eq!(
        (e.file.as_str(), e.line),
        ("participants/P1/profile.yaml", Some(5))
    );
    assert_eq!(
        e.message,
        "enrolment date 2025-03-31 is 366 days before the program starts (2026-04-01); the \
         participant cannot be used"
    );
    // A sign-up up to a year before the start is read.
    let fine = PROFILE.replace("enrolled: 2026-04-01", "enrolled: 2025-04-01");
    fs::write(dir.path.join("profile.yaml"), fine).unwrap();
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.diagnostics.is_empty(), "{:#?}", lp.diagnostics);
    assert_eq!(lp.data.unwrap().profile.enrolled.to_string(), "2025-04-01");
}

#[test]
fn an_enrolment_after_the_program_ends_is_an_error_at_its_line() {
    // `2062-04-01` for `2026-04-01` (program April to September 2026): every row of every file
    // was dropped as "before enrolment", the participant had no report and was left out of
    // the group figures, and the run ended with exit 1 (warnings) as if nothing were wrong.
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights: &[u8] = b"date,weight,unit\n2026-04-02,80.1,kg\n2026-04-09,79.8,kg\n";
    let late = PROFILE.replace("enrolled: 2026-04-01", "enrolled: 2062-04-01");
    let dir = participant(
        tmp.path(),
        "P1",
        &[("profile.yaml", late.as_bytes()), ("weights.csv", weights)],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.data.is_none(), "the participant is not used");
    let e = lp
        .diagnostics
        .iter()
        .find(|d| d.severity == crate::diag::Severity::Error)
        .expect("an error");
    assert_eq!(
        (e.file.as_str(), e.line, e.column),
        ("participants/P1/profile.yaml", Some(5), Some(11))
    );
    assert_eq!(
        e.message,
        "enrolment date 2062-04-01 is after the program ends (2026-09-30); the participant \
         cannot be used"
    );
    // Enrolled on the last day: read.
    let fine = PROFILE.replace("enrolled: 2026-04-01", "enrolled: 2026-09-30");
    fs::write(dir.path.join("profile.yaml"), fine).unwrap();
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.data.is_some(), "{:#?}", lp.diagnostics);
}

#[test]
fn the_profile_height_and_high_bmi_flag_reach_the_weights_reader() {
    // 180 cm: a median of 199.6 "kg" is a BMI of 61.6, and as pounds (90.5 kg) one of 27.9.
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights: &[u8] =
        b"date,weight,unit\n2026-04-02,200.0,kg\n2026-04-09,199.6,kg\n2026-04-16,199.0,kg\n";
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", PROFILE.as_bytes()),
            ("weights.csv", weights),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    let data = lp.data.expect("the participant is used, without the file");
    assert!(data.weights.is_empty());
    let e = &lp.diagnostics[0];
    assert_eq!(
        (e.severity, e.file.as_str(), e.line, e.column),
        (
            crate::diag::Severity::Error,
            "participants/P1/weights.csv",
            Some(2),
            Some(2)
        )
    );
    assert!(
        e.message
            .contains("give a BMI of 61.6 at the profile's height of 180 cm"),
        "{e}"
    );
    // Checked by the team: read as written.
    let flagged = format!("{PROFILE}flags: [High BMI checked]\n");
    fs::write(dir.path.join("profile.yaml"), flagged).unwrap();
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.diagnostics.is_empty(), "{:#?}", lp.diagnostics);
    assert_eq!(lp.data.unwrap().weights[0].weight.kg(), 200.0);
}

/// `Site:` in a profile of a program with `group_by: [site]` (YAML keys are typed by hand): the
/// participant had no site, and was counted under "(not recorded)" instead of at their site,
/// with no word. The key is read as the program names it, with a note.
#[test]
fn a_group_key_in_other_case_or_spacing_is_read_as_report_group_by_names_it() {
    let tmp = tempfile::tempdir().unwrap();
    fs::write(
        tmp.path().join("program.yaml"),
        format!("{PROGRAM}report: {{ group_by: [site, work_team] }}\n"),
    )
    .unwrap();
    let p = crate::program::load_program(tmp.path()).unwrap();
    let text = format!("{PROFILE}groups: {{ Site: Kiln Row, Work Team: Glazing, shift: B }}\n");
    let dir = participant(tmp.path(), "P1", &[("profile.yaml", text.as_bytes())]);
    let lp = load_participant(&p, &dir, as_of());
    let data = lp.data.expect("usable");
    let groups: Vec<(&str, &str)> = data
        .profile
        .groups
        .iter()
        .map(|(k, v)| (k.as_str(), v.as_str()))
        .collect();
    assert_eq!(
        groups,
        [
            ("shift", "B"),
            ("site", "Kiln Row"),
            ("work_team", "Glazing")
        ]
    );
    let notes: Vec<&str> = lp.notes.iter().map(|n| n.message.as_str()).collect();
    assert!(
        notes.contains(&"group `Site` read as `site`, the name report.group_by gives it"),
        "{notes:?}"
    );
    // Written two ways in one profile: which one counts cannot be known; neither is taken.
    let both = format!("{PROFILE}groups: {{ Site: Kiln Row, SITE: North }}\n");
    fs::write(dir.path.join("profile.yaml"), both).unwrap();
    let lp = load_participant(&p, &dir, as_of());
    // ... and said, at the `groups` line: the participant is counted as "(not recorded)".
    let warned: Vec<String> = lp
        .diagnostics
        .iter()
        .filter(|d| d.message.contains("is written 2 ways"))
        .map(|d| format!("{}:{:?}: {}", d.file, d.line, d.message))
        .collect();
    assert_eq!(warned.len(), 1, "{:?}", lp.diagnostics);
    assert!(
        warned[0].ends_with(
            "profile.yaml:Some(6): group `site` is written 2 ways (`SITE`, `Site`), so which \
             value counts cannot be known; the participant is counted under \"(not recorded)\" \
             for `site`"
        ),
        "{warned:?}"
    );
    assert!(!lp.data.expect("usable").profile.groups.contains_key("site"));
}

/// A participant folder hidden by its name (`.SG-050`: a typo, a sync tool's rename) was skipped
/// without a word, as `.git` is; one that holds a profile.yaml is now named in a warning (and
/// still not read). Other hidden entries stay silent.
#[test]
fn a_hidden_folder_with_a_profile_is_named() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    participant(tmp.path(), "P1", &[("profile.yaml", PROFILE.as_bytes())]);
    participant(tmp.path(), ".P2", &[("profile.yaml", PROFILE.as_bytes())]);
    participant(tmp.path(), ".git", &[("config", b"x")]);
    participant(tmp.path(), "..x", &[("profile.yaml", PROFILE.as_bytes())]);
    let (dirs, diags) = discover(&p);
    assert_eq!(
        dirs.iter().map(|d| d.id.as_str()).collect::<Vec<_>>(),
        vec!["P1"]
    );
    let warned: Vec<&str> = diags
        .iter()
        .filter(|d| d.severity == Severity::Warning && d.message.contains("hidden folder"))
        .map(|d| d.file.as_str())
        .collect();
    assert_eq!(
        warned,
        vec!["participants/..x", "participants/.P2"],
        "{diags:#?}"
    );
    assert_eq!(diags.len(), 2, "{diags:#?}");
}

/// What file systems and operating systems put in any folder is no participant (attack22): a
/// Mac's zip archive of the participant folders unpacked `__MACOSX/` beside them, which was
/// "participant folder `__MACOSX` has no profile.yaml" (exit code 4 on every run); a participants
/// folder that is a mount point holds `lost+found/`, which was "not a usable participant id …
/// rename the folder"; Windows Explorer's `Thumbs.db` and `desktop.ini` were files "to move"
/// (exit code 1).
#[test]
fn file_system_and_operating_system_entries_are_not_participants() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    participant(tmp.path(), "P1", &[("profile.yaml", PROFILE.as_bytes())]);
    participant(
        tmp.path(),
        "__MACOSX/P1",
        &[("._profile.yaml", b"\0\x05\x16\x07")],
    );
    participant(tmp.path(), "lost+found", &[]);
    let base = tmp.path().join("participants");
    fs::write(base.join("Thumbs.db"), b"x").unwrap();
    fs::write(base.join("desktop.ini"), b"x").unwrap();
    let (dirs, diags) = discover(&p);
    assert_eq!(
        dirs.iter().map(|d| d.id.as_str()).collect::<Vec<_>>(),
        vec!["P1"]
    );
    assert!(diags.is_empty(), "{diags:#?}");
    // A folder of another name is still named.
    participant(tmp.path(), "lost_found", &[]);
    let (dirs, _) = discover(&p);
    assert_eq!(dirs.len(), 2);
}

/// A participant's files one folder down (an archive unpacked into a folder of its own,
/// `P1/P1/profile.yaml`): the error's hint said "add profile.yaml to the folder" (attack22); it
/// now names the folder that holds it.
#[test]
fn a_profile_one_folder_down_is_named_in_the_hint() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let dir = participant(tmp.path(), "P1", &[]);
    participant(tmp.path(), "P1/P1", &[("profile.yaml", PROFILE.as_bytes())]);
    let loaded = load_participant(&p, &dir, as_of());
    assert!(loaded.data.is_none());
    assert_eq!(loaded.diagnostics.len(), 1, "{:#?}", loaded.diagnostics);
    assert_eq!(
        loaded.diagnostics[0].hint.as_deref(),
        Some(
            "the folder `P1` inside it holds a profile.yaml: move that folder's files up into \
             participants/P1/ (an archive unpacked into a folder of its own)"
        )
    );
}

/// The tidy metrics' rows in the file and rows used: a file of 7 data rows of which 4 are
/// dropped (a duplicate, a row before enrolment, a row of the wrong shape, an unreadable
/// weight) gives 7 and 3; blank lines, a repeated header and summary rows are no data rows.
/// Before, nothing said how many rows a file held or how many were read.
#[test]
fn rows_in_the_file_and_rows_used_count_every_dropped_row() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let weights = b"date,weight,unit\n\
        2026-04-01,91,kg\n\
        2026-04-02 07:30,90.5,kg\n\
        2026-04-02 07:30,90.5,kg\n\
        \n\
        2026-03-20,92,kg\n\
        date,weight,unit\n\
        2026-04-03,90,kg,scale,extra\n\
        2026-04-04,abc,kg\n\
        2026-04-05,89.8,kg\n\
        Average,90.3,kg\n\
        Average: 90.3 kg\n";
    // A day of two rows (both used, summed), an implausible day and an unreadable row.
    let intake = b"date,kcal\n\
        2026-04-02,1800\n\
        2026-04-03,20000\n\
        2026-04-04,abc\n\
        2026-04-05,1900\n\
        2026-04-05,300\n";
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", PROFILE.as_bytes()),
            ("weights.csv", weights),
            ("intake.csv", intake),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    let data = lp.data.as_ref().unwrap();
    assert_eq!(data.weights.len(), 3, "{:#?}", lp.diagnostics);
    assert_eq!(
        lp.rows.weights,
        RowCount {
            in_file: Some(7),
            used: Some(3)
        },
        "{:#?}",
        lp.diagnostics
    );
    // Each dropped weigh-in is named: the duplicate (a weigh-in with a time of day repeated;
    // two without one are two weigh-ins), before enrolment, the wrong shape, not a number.
    for line in [4, 6, 8, 9] {
        assert!(
            lp.diagnostics.iter().any(|d| d.line == Some(line)),
            "line {line}: {:#?}",
            lp.diagnostics
        );
    }
    assert_eq!(data.intake.len(), 2);
    assert_eq!(
        lp.rows.intake,
        RowCount {
            in_file: Some(5),
            used: Some(3)
        },
        "{:#?}",
        lp.diagnostics
    );
    // No activity.csv: empty cells, not 0.
    assert_eq!(lp.rows.activity, RowCount::default());
}

/// A file refused as a whole gives its rows in the file and 0 used; a day's `Total` row beside
/// its meals is a summary row, not a data row.
#[test]
fn a_refused_file_gives_its_rows_and_none_used() {
    let tmp = tempfile::tempdir().unwrap();
    let p = program(tmp.path());
    let dir = participant(
        tmp.path(),
        "P1",
        &[
            ("profile.yaml", PROFILE.as_bytes()),
            (
                "activity.csv",
                b"date,activity,minutes\n2026-04-02,walking,abc\n2026-04-03,walking,xyz\n",
            ),
            (
                "intake.csv",
                b"date,meal,kcal\n2026-04-02,breakfast,500\n2026-04-02,lunch,700\n\
                  2026-04-02,Total,1200\n2026-04-03,dinner,900\n",
            ),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(lp.data.as_ref().unwrap().activity.is_empty());
    assert_eq!(
        lp.rows.activity,
        RowCount {
            in_file: Some(2),
            used: Some(0)
        },
        "{:#?}",
        lp.diagnostics
    );
    assert_eq!(
        lp.rows.intake,
        RowCount {
            in_file: Some(3),
            used: Some(3)
        },
        "{:#?}",
        lp.diagnostics
    );
    // Refused at its header (no `weight` column it knows): the reader never reached its rows,
    // and it gave 0 rows in the file, as if the export were empty. Its three rows (one with a
    // quoted line break in its note, one blank line) are counted.
    let dir = participant(
        tmp.path(),
        "P2",
        &[
            ("profile.yaml", PROFILE.replace("P1", "P2").as_bytes()),
            (
                "weights.csv",
                b"Date,Poids,Note\n2026-04-02,80,\"first\nweigh-in\"\n\n2026-04-03,79.8,\n\
                  2026-04-04,79.6,\n",
            ),
        ],
    );
    let lp = load_participant(&p, &dir, as_of());
    assert!(
        lp.diagnostics
            .iter()
            .any(|d| d.message.contains("missing required column")),
        "{:#?}",
        lp.diagnostics
    );
    assert_eq!(
        lp.rows.weights,
        RowCount {
            in_file: Some(3),
            used: Some(0)
        },
        "{:#?}",
        lp.diagnostics
    );
}

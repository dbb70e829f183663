//! The FHIR importer round trip: a program's weigh-ins, heights and labs exported as a FHIR R4
//! Bundle (written here from the specification's structure), imported with
//! `cohortpress import fhir`, and run: the metrics are the same as from the original files,
//! including what depends on the weigh-in source (clinic weigh-ins, carried as
//! `Observation.method`).

use crate::harness::ProgramTest;
use chrono::NaiveDate;
use cohortpress::import::fhir::{
    BODY_HEIGHT, BODY_WEIGHT, DIASTOLIC, FASTING_GLUCOSE_MASS, FASTING_GLUCOSE_MOLES, HBA1C, LOINC,
    SYSTOLIC, WAIST,
};
use serde_json::{Value, json};
use std::fs;

const AS_OF: &str = "2026-10-15";

fn ucum(unit_as_written: &str) -> &'static str {
    match unit_as_written.to_lowercase().as_str() {
        "%" => "%",
        "mmol/mol" => "mmol/mol",
        "mg/dl" => "mg/dL",
        "mmol/l" => "mmol/L",
        "cm" => "cm",
        "in" => "[in_i]",
        "mmhg" => "mm[Hg]",
        other => panic!("unit {other}"),
    }
}

/// One Bundle with every participant's Patient and Observations.
fn export(report: &cohortpress::check::CheckReport) -> (Value, String) {
    let mut entries = Vec::new();
    let mut map = String::from("fhir_id,participant_id\n");
    for (n, p) in report.participants.iter().enumerate() {
        let d = p.data.as_ref().expect("usable");
        let fid = format!("pt{n:04}x");
        map.push_str(&format!("{fid},{}\n", d.profile.id));
        let sex = sex_word(d.profile.sex);
        entries.push(json!({"fullUrl": format!("urn:uuid:{fid}"), "resource": {
            "resourceType": "Patient", "id": fid, "gender": sex,
            "birthDate": d.profile.birth_date.unwrap().to_string()}}));
        let mut k = 0;
        let mut obs = |code: &str,
                       when: String,
                       value: Value,
                       components: Option<Value>,
                       method: Option<&str>| {
            k += 1;
            let mut o = json!({"resourceType": "Observation", "id": format!("{fid}-{k}"),
                "status": "final", "code": {"coding": [{"system": LOINC, "code": code}]},
                "subject": {"reference": format!("Patient/{fid}")}, "effectiveDateTime": when});
            // The weigh-in source travels as `Observation.method` (its text).
            if let Some(m) = method {
                o["method"] = json!({"text": m});
            }
            if let Some(c) = components {
                o["component"] = c;
            } else {
                o["valueQuantity"] = value;
            }
            entries.push(json!({"resource": o}));
        };
        let q = |v: f64, code: &str| json!({"value": v, "system": "http://unitsofmeasure.org", "code": code, "unit": code});
        obs(
            BODY_HEIGHT,
            d.profile.enrolled.to_string(),
            q(d.profile.height.cm(), "cm"),
            None,
            None,
        );
        for w in &d.weights {
            let when = match &w.time {
                Some(t) => format!("{}T{t}:00-05:00", w.date),
                None => w.date.to_string(),
            };
            obs(
                BODY_WEIGHT,
                when,
                q(w.weight.kg(), "kg"),
                None,
                w.source.as_deref(),
            );
        }
        for l in &d.labs {
            let u = ucum(&l.unit_as_written);
            let code = match (format!("{:?}", l.test).as_str(), u) {
                ("Hba1c", _) => HBA1C,
                ("FastingGlucose", "mg/dL") => FASTING_GLUCOSE_MASS,
                ("FastingGlucose", _) => FASTING_GLUCOSE_MOLES,
                ("Waist", _) => WAIST,
                ("SystolicBp", _) => SYSTOLIC,
                ("DiastolicBp", _) => DIASTOLIC,
                (t, _) => panic!("{t}"),
            };
            obs(
                code,
                l.date.to_string(),
                q(l.value_as_written, u),
                None,
                None,
            );
        }
    }
    (
        json!({"resourceType": "Bundle", "type": "collection", "entry": entries}),
        map,
    )
}

/// profile.yaml's word for a sex (FHIR's gender codes use the same two words).
fn sex_word(sex: Option<cohortpress_metric_api::Sex>) -> &'static str {
    match sex {
        Some(cohortpress_metric_api::Sex::Female) => "female",
        Some(cohortpress_metric_api::Sex::Male) => "male",
        None => "unrecorded",
    }
}

#[test]
fn a_program_exported_as_fhir_and_imported_gives_the_same_metrics() {
    let ours = ProgramTest::sample();
    fs::remove_dir_all(&ours.dir).unwrap();
    cohortpress::demo::generate(
        &ours.dir,
        &cohortpress::demo::DemoOptions {
            participants: 10,
            seed: 77,
            with_defects: false,
        },
    )
    .unwrap();
    let as_of = NaiveDate::parse_from_str(AS_OF, "%Y-%m-%d").unwrap();
    // What FHIR carries: weigh-ins, labs, and a profile of sex, birth date, height and
    // enrolment (the first observation: the height, measured at enrolment).
    let report = cohortpress::check::check_program(&ours.dir, as_of);
    for p in &report.participants {
        let d = p.data.as_ref().unwrap();
        let dir = ours.dir.join("participants").join(&p.id);
        for f in ["intake.csv", "activity.csv", "sessions.csv"] {
            let _ = fs::remove_file(dir.join(f));
        }
        let birth = d.profile.birth_date.unwrap_or_else(|| {
            d.profile.enrolled - chrono::Days::new((d.profile.age_years * 365.2425) as u64)
        });
        fs::write(
            dir.join("profile.yaml"),
            format!(
                "id: {}\nsex: {}\nbirth_date: {birth}\nheight: {} cm\nenrolled: {}\n",
                p.id,
                sex_word(d.profile.sex),
                d.profile.height.cm(),
                d.profile.enrolled
            ),
        )
        .unwrap();
    }
    let report = cohortpress::check::check_program(&ours.dir, as_of);
    assert_eq!(report.usable(), 10);
    let (bundle, map) = export(&report);

    // Import into a new program with the same program.yaml.
    let theirs = ProgramTest::sample();
    fs::remove_dir_all(theirs.dir.join("participants")).unwrap();
    fs::write(
        theirs.dir.join("program.yaml"),
        fs::read(ours.dir.join("program.yaml")).unwrap(),
    )
    .unwrap();
    let scratch = theirs.dir.parent().unwrap();
    fs::write(
        scratch.join("bundle.json"),
        serde_json::to_vec_pretty(&bundle).unwrap(),
    )
    .unwrap();
    fs::write(scratch.join("ids.csv"), map).unwrap();
    let bundle_path = scratch.join("bundle.json").to_string_lossy().into_owned();
    let ids_path = scratch.join("ids.csv").to_string_lossy().into_owned();
    let out = theirs.run(&[
        "import",
        "fhir",
        &bundle_path,
        "--out",
        "{dir}",
        "--ids",
        &ids_path,
    ]);
    assert_eq!(out.code, 0, "{}{}", out.stdout, out.stderr);
    assert!(
        out.stdout.starts_with("imported 10 participants"),
        "{}",
        out.stdout
    );

    let mut metrics = Vec::new();
    for t in [&ours, &theirs] {
        let r = t.run(&[
            "run",
            "{dir}",
            "--as-of",
            AS_OF,
            "--period",
            "2026-09",
            "--formats",
            "html",
            "--quiet",
        ]);
        assert!(r.code <= 1, "{}", r.stderr);
        let m = |f: &str| fs::read_to_string(t.dir.join("reports/metrics").join(f)).unwrap();
        metrics.push((m("participants.csv"), m("weekly.csv"), m("tables.csv")));
    }
    assert!(metrics[0].0.lines().count() == 11, "{}", metrics[0].0);
    assert_eq!(metrics[0].0, metrics[1].0, "participants.csv differs");
    assert_eq!(metrics[0].1, metrics[1].1, "weekly.csv differs");
    assert_eq!(metrics[0].2, metrics[1].2, "tables.csv differs");
    // The demo program's clinic weigh-ins got an offset, so the source did travel.
    assert!(
        metrics[1]
            .2
            .lines()
            .any(|l| l.contains("source_offsets") && l.contains("clinic")),
        "no clinic offset in tables.csv"
    );
}

/// Two FHIR patients whose participant ids differ only in case: they were written as two
/// folders, which name one folder on case-insensitive file systems (there the import stopped
/// with "File exists", naming neither) and which `run` leaves out.
#[test]
fn two_patients_for_one_participant_folder_are_refused_by_name() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let patient = |id: &str| json!({"resourceType": "Patient", "id": id, "gender": "female", "birthDate": "1980-01-01"});
    let weight = |id: &str| {
        json!({"resourceType": "Observation", "id": format!("{id}-w"), "status": "final",
        "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
        "subject": {"reference": format!("Patient/{id}")}, "effectiveDateTime": "2026-04-01",
        "valueQuantity": {"value": 80.0, "system": "http://unitsofmeasure.org", "code": "kg"}})
    };
    let ndjson = |ids: &[&str]| {
        ids.iter()
            .flat_map(|i| [patient(i).to_string(), weight(i).to_string()])
            .collect::<Vec<_>>()
            .join("\n")
    };
    let bin = env!("CARGO_BIN_EXE_cohortpress");
    let import = |file: &std::path::Path, out: &std::path::Path, ids: Option<&std::path::Path>| {
        let mut c = std::process::Command::new(bin);
        c.args(["import", "fhir"]).arg(file).arg("--out").arg(out);
        if let Some(m) = ids {
            c.arg("--ids").arg(m);
        }
        c.output().unwrap()
    };
    let file = dir.path().join("case.ndjson");
    fs::write(&file, ndjson(&["SG-001", "sg-001"])).unwrap();
    let out = dir.path().join("p1");
    let o = import(&file, &out, None);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("FHIR patients `SG-001` and `sg-001` would both be participant `sg-001` (and `SG-001`, which differs only in case)"),
        "{err}"
    );
    assert!(!out.join("participants").exists(), "nothing written");
    // A map giving two FHIR ids participant ids that differ only in case.
    fs::write(&file, ndjson(&["a1", "b2"])).unwrap();
    let map = dir.path().join("map.csv");
    fs::write(&map, "fhir_id,participant_id\na1,P-1\nb2,p-1\n").unwrap();
    let out = dir.path().join("p2");
    let o = import(&file, &out, Some(&map));
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(
            "FHIR patients `a1` and `b2` would both be participant `p-1` (and `P-1`, which differs only in case);"
        ),
        "{err}"
    );
    assert!(
        !out.exists() || fs::read_dir(&out).unwrap().next().is_none(),
        "nothing written"
    );
    // A patient whose id differs only in case from a participant folder the program already
    // has: the import wrote `sg-001` beside `SG-001`, said it had imported one participant
    // (exit 0), and from then on every run left SG-001 out with the new folder.
    let out = dir.path().join("p3");
    fs::create_dir_all(out.join("participants/SG-001")).unwrap();
    fs::write(out.join("participants/SG-001/profile.yaml"), "id: SG-001\n").unwrap();
    fs::write(&file, ndjson(&["sg-001", "sg-002"])).unwrap();
    let o = import(&file, &out, None);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(6), "{err}");
    assert!(
        err.contains("`SG-001`, which differs from `sg-001` only in case"),
        "{err}"
    );
    let names: Vec<_> = fs::read_dir(out.join("participants"))
        .unwrap()
        .map(|e| e.unwrap().file_name())
        .collect();
    assert_eq!(names, ["SG-001"], "nothing written");
}

/// A write that fails part-way (here `participants` is a file, so its folder cannot be made)
/// left `.cohortpress-import.staging` behind in the program folder; it is removed now.
#[test]
fn a_failed_import_leaves_no_staging_behind() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let file = dir.path().join("one.ndjson");
    let patient = json!({"resourceType": "Patient", "id": "SG-001", "gender": "female", "birthDate": "1980-01-01"});
    let weight = json!({"resourceType": "Observation", "id": "w1", "status": "final",
        "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
        "subject": {"reference": "Patient/SG-001"}, "effectiveDateTime": "2026-04-01",
        "valueQuantity": {"value": 80.0, "system": "http://unitsofmeasure.org", "code": "kg"}});
    fs::write(&file, format!("{patient}\n{weight}\n")).unwrap();
    let out = dir.path().join("p");
    fs::create_dir(&out).unwrap();
    fs::write(out.join("participants"), "not a folder").unwrap();
    let o = std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
        .args(["import", "fhir"])
        .arg(&file)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_ne!(o.status.code(), Some(0), "{err}");
    assert!(err.contains("cannot write the import"), "{err}");
    assert!(
        !out.join(".cohortpress-import.staging").exists(),
        "staging left behind"
    );
    assert_eq!(
        fs::read_to_string(out.join("participants")).unwrap(),
        "not a folder"
    );
}

/// An import stopped by SIGTERM (a scheduler's stop; SIGINT is a Ctrl-C) left
/// `.cohortpress-import.staging`, with the identified files of the patients written so far, in
/// the program folder until the next import: only `run` and `merge` removed their staging on an
/// interrupt. It is removed now, the import ends as SIGTERM ends a process (143 in a shell),
/// says so on standard error, and no participant folder was moved into place. Signalled once
/// the staging folder holds a few of the 3,000 patients' folders.
#[cfg(unix)]
#[test]
fn an_import_stopped_by_sigterm_leaves_no_staging_behind() {
    use std::io::Read as _;
    use std::os::unix::process::ExitStatusExt as _;
    use std::time::{Duration, Instant};
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let file = dir.path().join("big.ndjson");
    let mut text = String::new();
    for i in 0..3000 {
        let pid = format!("P{i:05}");
        text.push_str(&json!({"resourceType": "Patient", "id": pid, "gender": "female", "birthDate": "1980-01-01"}).to_string());
        text.push('\n');
        for day in 1..=3 {
            let w = json!({"resourceType": "Observation", "id": format!("w{i}-{day}"), "status": "final",
                "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
                "subject": {"reference": format!("Patient/{pid}")}, "effectiveDateTime": format!("2026-04-0{day}"),
                "valueQuantity": {"value": 80.0, "system": "http://unitsofmeasure.org", "code": "kg"}});
            text.push_str(&w.to_string());
            text.push('\n');
        }
    }
    fs::write(&file, text).unwrap();
    let out = dir.path().join("p");
    let staging = out.join(".cohortpress-import.staging");
    let mut child = std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
        .args(["import", "fhir"])
        .arg(&file)
        .arg("--out")
        .arg(&out)
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    // A folder for the marker and at least three patients: the import is writing.
    let deadline = Instant::now() + Duration::from_secs(120);
    while fs::read_dir(&staging).map_or(0, |d| d.count()) < 4 {
        if let Some(status) = child.try_wait().unwrap() {
            panic!("the import ended ({status}) before its staging folder held 3 patients");
        }
        assert!(
            Instant::now() < deadline,
            "the import never filled its staging folder"
        );
        std::thread::sleep(Duration::from_millis(2));
    }
    let killed = std::process::Command::new("kill")
        .args(["-TERM", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let status = child.wait().unwrap();
    assert_eq!(status.signal(), Some(15), "{status}");
    assert!(
        !staging.exists(),
        "the staging folder is left: {:?}",
        fs::read_dir(&staging).map(|d| d.count())
    );
    let mut stderr = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut stderr)
        .unwrap();
    assert!(
        stderr.contains(&format!(
            "interrupted by SIGTERM: the import stops here; the unfinished output it was writing \
             ({}) was removed, and {} was left as it was",
            staging.display(),
            out.join("participants").display()
        )),
        "{stderr}"
    );
    assert_eq!(
        fs::read_dir(out.join("participants")).unwrap().count(),
        0,
        "a participant folder was moved into place"
    );
    // Only the lock file and the (empty) participants folder are left in the program folder.
    let mut left: Vec<String> = fs::read_dir(&out)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    left.sort();
    assert_eq!(left, [".cohortpress-import.lock", "participants"]);
}

/// The imported files are on disk before their folders are moved into place, as a run's
/// output is: the import wrote them and renamed their folders under `participants/` with no
/// sync at all, so a power cut soon after a successful import could leave participant folders
/// whose files are empty or cut short, under the names every later run reads. Watched through
/// the system calls (`strace`); skipped with a message where it is missing or not allowed.
#[test]
fn imported_files_are_synced_before_their_folders_are_moved_into_place() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let usable = std::process::Command::new("strace")
        .args(["-f", "-qq", "-e", "trace=none", "true"])
        .output()
        .is_ok_and(|o| o.status.success());
    if !usable {
        eprintln!("SKIPPED: strace is missing or cannot trace here");
        return;
    }
    let file = dir.path().join("two.ndjson");
    let mut lines = Vec::new();
    for id in ["SG-001", "SG-002"] {
        lines.push(json!({"resourceType": "Patient", "id": id, "gender": "female", "birthDate": "1980-01-01"}).to_string());
        lines.push(
            json!({"resourceType": "Observation", "id": format!("{id}-w"), "status": "final",
            "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
            "subject": {"reference": format!("Patient/{id}")}, "effectiveDateTime": "2026-04-01",
            "valueQuantity": {"value": 80.0, "system": "http://unitsofmeasure.org", "code": "kg"}})
            .to_string(),
        );
    }
    fs::write(&file, lines.join("\n")).unwrap();
    let out = dir.path().join("p");
    let trace = dir.path().join("trace.txt");
    let o = std::process::Command::new("strace")
        .args(["-f", "-qq", "-y", "-o"])
        .arg(&trace)
        .args([
            "-e",
            "trace=fsync,fdatasync,syncfs,rename,renameat,renameat2",
            env!("CARGO_BIN_EXE_cohortpress"),
            "import",
            "fhir",
        ])
        .arg(&file)
        .arg("--out")
        .arg(&out)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(out.join("participants/SG-002/weights.csv").is_file());
    let calls = fs::read_to_string(&trace).unwrap();
    let calls: Vec<&str> = calls.lines().filter(|l| !l.contains("resumed>")).collect();
    let first_move = calls
        .iter()
        .position(|l| l.contains("rename") && l.contains("/participants/SG-0"))
        .unwrap_or_else(|| panic!("no folder moved into participants/:\n{}", calls.join("\n")));
    let staging = ".cohortpress-import.staging";
    let before = &calls[..first_move];
    // Every file's data (syncfs of its file system, or each file), then each folder.
    let files_synced = before
        .iter()
        .any(|l| l.contains("syncfs(") && l.contains(staging))
        || ["SG-001", "SG-002"].iter().all(|p| {
            before
                .iter()
                .filter(|l| l.contains("fsync(") && l.contains(&format!("{staging}/{p}/")))
                .count()
                >= 2
        });
    assert!(
        files_synced,
        "files not synced before the move:\n{}",
        calls.join("\n")
    );
    for p in ["SG-001", "SG-002"] {
        assert!(
            before
                .iter()
                .any(|l| l.contains("fsync(") && l.contains(&format!("{staging}/{p}>"))),
            "folder {p} not synced before the move:\n{}",
            calls.join("\n")
        );
    }
    assert!(
        calls[first_move..]
            .iter()
            .any(|l| l.contains("fsync(") && l.contains("/p/participants>")),
        "participants/ not synced after the moves:\n{}",
        calls.join("\n")
    );
}

/// What the import prints quotes values from the resources (observation ids, units, patient
/// ids): a FHIR file holding terminal escape sequences there (ESC `]0;` sets the window title,
/// ESC `[2J` clears the screen, a line break forges a line) printed them raw to the terminal,
/// while every other command shows such characters escaped (`\u{1b}`).
#[test]
fn values_from_fhir_resources_reach_the_terminal_escaped() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let file = dir.path().join("hostile.ndjson");
    let weight = |id: &str, unit: &str| {
        json!({"resourceType": "Observation", "id": id, "status": "final",
            "code": {"coding": [{"system": LOINC, "code": BODY_WEIGHT}]},
            "subject": {"reference": "Patient/P1"}, "effectiveDateTime": "2026-04-01",
            "valueQuantity": {"value": 80.0, "code": unit}})
        .to_string()
    };
    let lines = [
        json!({"resourceType": "Patient", "id": "P1", "gender": "female"}).to_string(),
        json!({"resourceType": "Patient", "id": "Q\u{1b}[2J\nskipped: forged"}).to_string(),
        weight("w\u{1b}]0;title\u{7}", "[stone]"),
        weight("w2", "st\u{1b}[31m\u{202e}"),
    ];
    fs::write(&file, lines.join("\n")).unwrap();
    let map = dir.path().join("map.csv");
    fs::write(&map, "fhir_id,participant_id\nP1,P1\n").unwrap();
    let import = |ids: Option<&std::path::Path>| {
        let mut c = std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"));
        c.args(["import", "fhir"])
            .arg(&file)
            .arg("--out")
            .arg(dir.path().join("p"));
        if let Some(m) = ids {
            c.arg("--ids").arg(m);
        }
        c.output().unwrap()
    };
    // Without a map, the unusable patient id is the error.
    let o = import(None);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8(o.stderr).unwrap();
    assert_eq!(
        err.trim_end(),
        "error: FHIR patient id `Q\\u{1b}[2J\\nskipped: forged` is not a usable participant id; \
         give `--ids MAP.csv` with columns fhir_id,participant_id"
    );
    // With a map: the unmapped patient, the observation id and the unit are quoted escaped.
    let o = import(Some(&map));
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    let out = String::from_utf8(o.stdout).unwrap();
    assert!(!out.contains(['\u{1b}', '\u{7}', '\u{202e}']), "{out:?}");
    assert!(
        out.contains("was left out: Q\\u{1b}[2J\\nskipped: forged\n"),
        "{out}"
    );
    assert!(out.contains("Observation w\\u{1b}]0;title\\u{7} (LOINC 29463-7) has unit `[stone]`"));
    assert!(out.contains("has unit `st\\u{1b}[31m\\u{202e}`, which is not read"));
    assert_eq!(
        out.lines().filter(|l| l.starts_with("skipped: ")).count(),
        2
    );
}

/// A folder of someone's under the import's staging name (`.cohortpress-import.staging`) was
/// removed with everything in it by the next import; it is now refused and kept, and only a
/// staging folder a killed import left (with its marker) is removed.
#[test]
fn a_folder_of_someones_under_the_staging_name_is_never_removed() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let file = dir.path().join("p.ndjson");
    fs::write(
        &file,
        json!({"resourceType": "Patient", "id": "P1", "gender": "female"}).to_string(),
    )
    .unwrap();
    let program = dir.path().join("prog");
    let staging = program.join(".cohortpress-import.staging");
    fs::create_dir_all(&staging).unwrap();
    fs::write(staging.join("mine.txt"), "my notes\n").unwrap();
    let import = || {
        std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
            .args(["import", "fhir"])
            .arg(&file)
            .arg("--out")
            .arg(&program)
            .output()
            .unwrap()
    };
    let o = import();
    assert_eq!(o.status.code(), Some(6), "{o:?}");
    assert!(
        String::from_utf8_lossy(&o.stderr).contains(
            "is in the way of the import's staging folder and was not made by cohortpress"
        ),
        "{o:?}"
    );
    assert_eq!(
        fs::read_to_string(staging.join("mine.txt")).unwrap(),
        "my notes\n"
    );
    assert!(!program.join("participants/P1").exists());
    // What a killed import leaves (its marker, a participant folder half written) is removed.
    fs::remove_dir_all(&staging).unwrap();
    fs::create_dir_all(staging.join("P1")).unwrap();
    fs::write(staging.join(".cohortpress-import"), "").unwrap();
    let o = import();
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    assert!(program.join("participants/P1/profile.yaml").is_file());
    assert!(!staging.exists());
}

/// Two imports into one program folder shared `.cohortpress-import.staging` with no lock: the
/// second took the first's staging folder (its marker says "an import's") for a leftover and
/// removed it while the first was writing into it. Now the second refuses with the run lock's
/// exit code 7 and touches nothing; the first is played here by this test, which holds the lock
/// and has a participant folder half written in the staging folder.
#[test]
fn a_second_import_into_the_same_program_waits_its_turn() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let file = dir.path().join("p.ndjson");
    fs::write(
        &file,
        json!({"resourceType": "Patient", "id": "P2", "gender": "female"}).to_string(),
    )
    .unwrap();
    let program = dir.path().join("prog");
    let staging = program.join(".cohortpress-import.staging");
    // The first import, mid-write: its lock held, its staging folder with a folder in it.
    fs::create_dir_all(staging.join("P1")).unwrap();
    fs::write(staging.join(".cohortpress-import"), "").unwrap();
    fs::write(staging.join("P1/profile.yaml"), "id: P1\n").unwrap();
    let lock = fs::File::create(program.join(".cohortpress-import.lock")).unwrap();
    lock.try_lock().unwrap();
    let import = || {
        std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"))
            .args(["import", "fhir"])
            .arg(&file)
            .arg("--out")
            .arg(&program)
            .output()
            .unwrap()
    };
    let o = import();
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(7), "{o:?}");
    assert!(
        err.contains(&format!(
            "another cohortpress import is writing into {}; nothing was written",
            program.display()
        )),
        "{err}"
    );
    // The first import's staging is as it left it, and the second wrote nothing.
    assert_eq!(
        fs::read_to_string(staging.join("P1/profile.yaml")).unwrap(),
        "id: P1\n"
    );
    assert!(staging.join(".cohortpress-import").is_file());
    assert!(!program.join("participants").exists());
    // The first finishes (its folder moved into place, its staging removed, the lock let go):
    // the second import then goes through, beside it.
    fs::create_dir_all(program.join("participants")).unwrap();
    fs::rename(staging.join("P1"), program.join("participants/P1")).unwrap();
    fs::remove_dir_all(&staging).unwrap();
    drop(lock);
    let o = import();
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    assert!(program.join("participants/P2/profile.yaml").is_file());
    assert_eq!(
        fs::read_to_string(program.join("participants/P1/profile.yaml")).unwrap(),
        "id: P1\n"
    );
    assert!(!staging.exists());
}

/// An id map that gives one FHIR id two participant ids took the last line without a word, and
/// a participant id such as `CON` (a device name on Windows) was written as a folder that every
/// run skips, after the import said it had succeeded; so was a FHIR patient id `CON` without a
/// map. Each is refused, naming the map's line and column, and nothing is written.
#[test]
fn an_id_map_that_is_ambiguous_or_names_a_device_is_refused() {
    let dir = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let file = dir.path().join("p.ndjson");
    let patients = |id: &str| json!({"resourceType": "Patient", "id": id, "gender": "female"});
    fs::write(&file, format!("{}\n{}\n", patients("abc"), patients("con"))).unwrap();
    let program = dir.path().join("prog");
    let map = dir.path().join("map.csv");
    let import = |with_map: bool| {
        let mut c = std::process::Command::new(env!("CARGO_BIN_EXE_cohortpress"));
        c.args(["import", "fhir"])
            .arg(&file)
            .arg("--out")
            .arg(&program);
        if with_map {
            c.arg("--ids").arg(&map);
        }
        c.output().unwrap()
    };
    let m = map.display();
    for (text, says) in [
        (
            "fhir_id,participant_id\nabc,P1\ncon,P3\n abc , P2\n",
            format!("{m}:4:2: FHIR id `abc` is mapped twice (to `P1` on line 2, and to `P2` here)"),
        ),
        (
            "fhir_id;participant_id\nabc;P1\ncon; Con\n",
            format!("{m}:3:6: `Con` is a device name on Windows"),
        ),
    ] {
        fs::write(&map, text).unwrap();
        let o = import(true);
        let err = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{err}");
        assert!(err.contains(&says), "{err}");
        assert!(!program.exists(), "nothing written");
    }
    // Without a map, the FHIR id `con` is not used as a participant id either.
    let o = import(false);
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains(
            "FHIR patient id `con` is not a usable participant id (a device name on Windows"
        ),
        "{err}"
    );
    assert!(!program.exists(), "nothing written");
    // A map without either problem goes through.
    fs::write(&map, "fhir_id,participant_id\nabc,P1\ncon,P2\n").unwrap();
    let o = import(true);
    assert_eq!(o.status.code(), Some(0), "{o:?}");
    assert!(program.join("participants/P2/profile.yaml").is_file());
}

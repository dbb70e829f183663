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
    // `--state` on the command line wins over the key.
    let o = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        AS_OF,
        "--formats",
        "html",
        "--state",
        "elsewhere",
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

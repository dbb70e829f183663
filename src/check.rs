//! `cohortpress check`: load the program and every participant, and report every problem
//! without computing anything. [`check_program`] is also the loading step of a full run.

use crate::diag::{self, Diagnostic, Severity};
use crate::exit_code;
use crate::participant::{self, LoadedParticipant};
use crate::program::{self, Program};
use chrono::NaiveDate;
use rayon::prelude::*;
use std::io::Write;
use std::path::Path;

/// Everything loading found: the program (or why it is invalid), each participant in id order,
/// and the problems of the participants folder itself.
#[derive(Debug)]
pub struct CheckReport {
    /// The loaded program, or every problem in `program.yaml`.
    pub program: Result<Program, Vec<Diagnostic>>,
    /// Participants in folder-name order (empty when the program is invalid).
    pub participants: Vec<LoadedParticipant>,
    /// Problems found while listing `participants/` (bad folder names, stray files).
    pub discovery: Vec<Diagnostic>,
}

impl CheckReport {
    /// Whether nothing can be computed: `program.yaml` is invalid or `participants/` is missing.
    pub fn program_invalid(&self) -> bool {
        self.program.is_err() || self.discovery.iter().any(participant::is_folder_error)
    }

    /// Participants whose data can be used.
    pub fn usable(&self) -> usize {
        self.participants
            .iter()
            .filter(|p| p.data.is_some())
            .count()
    }

    /// Every diagnostic: program, discovery, then participants in order.
    pub fn all_diagnostics(&self) -> impl Iterator<Item = &Diagnostic> {
        let program: &[Diagnostic] = match &self.program {
            Err(d) => d,
            Ok(_) => &[],
        };
        program
            .iter()
            .chain(&self.discovery)
            .chain(self.participants.iter().flat_map(|p| &p.diagnostics))
    }

    /// (errors, warnings) over every diagnostic.
    pub fn counts(&self) -> (usize, usize) {
        let all: Vec<Diagnostic> = self.all_diagnostics().cloned().collect();
        diag::count(&all)
    }

    /// The exit code this report calls for (see [`crate::exit_code::Outcome`]).
    pub fn exit_code(&self) -> i32 {
        let left_out = self
            .participants
            .iter()
            .filter(|p| p.diagnostics.iter().any(|d| d.severity == Severity::Error))
            .count()
            + self
                .discovery
                .iter()
                .filter(|d| d.severity == Severity::Error)
                .count();
        let warnings = self
            .all_diagnostics()
            .filter(|d| d.severity == Severity::Warning)
            .count();
        exit_code::Outcome {
            program_invalid: self.program_invalid(),
            participants_left_out: left_out,
            module_failures: 0,
            warnings,
        }
        .exit_code()
    }

    /// The one-line summary printed last.
    pub fn summary(&self) -> String {
        let n = self.participants.len();
        let usable = self.usable();
        let (e, w) = self.counts();
        format!(
            "checked {n} participant{}: {usable} usable, {} with errors; {e} error{}, {w} warning{}",
            plural(n),
            n - usable,
            plural(e),
            plural(w)
        )
    }
}

fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

/// Loads the program at `root` and every participant (in parallel; results in folder order).
/// Reads only; nothing is computed or written.
pub fn check_program(root: &Path, as_of: NaiveDate) -> CheckReport {
    let program = program::load_program(root);
    let Ok(prog) = &program else {
        return CheckReport {
            program,
            participants: Vec::new(),
            discovery: Vec::new(),
        };
    };
    let (dirs, discovery) = participant::discover(prog);
    let participants: Vec<LoadedParticipant> = dirs
        .par_iter()
        .map(|d| participant::load_participant(prog, d, as_of))
        .collect();
    CheckReport {
        program,
        participants,
        discovery,
    }
}

/// Writes the human report: program and folder problems, then each participant's status and
/// diagnostics, then the summary line.
pub fn write_report(report: &CheckReport, out: &mut dyn Write) -> std::io::Result<()> {
    match &report.program {
        Err(diags) => {
            for d in diags {
                writeln!(out, "{d}")?;
            }
            let (e, _) = diag::count(diags);
            writeln!(
                out,
                "program.yaml is invalid ({e} error{}); nothing was checked further",
                plural(e)
            )?;
            return Ok(());
        }
        Ok(p) => writeln!(out, "program {} ({}): ok", p.info.id, p.info.title)?,
    }
    if !report.discovery.is_empty() {
        writeln!(out)?;
        for d in &report.discovery {
            writeln!(out, "{d}")?;
        }
    }
    for p in &report.participants {
        let (e, w) = diag::count(&p.diagnostics);
        let status = if p.data.is_some() {
            "usable"
        } else {
            "not usable"
        };
        let mut counts = Vec::new();
        if e > 0 {
            counts.push(format!("{e} error{}", plural(e)));
        }
        if w > 0 {
            counts.push(format!("{w} warning{}", plural(w)));
        }
        let counts = if counts.is_empty() {
            String::new()
        } else {
            format!(" ({})", counts.join(", "))
        };
        writeln!(out)?;
        writeln!(out, "{}: {status}{counts}", p.id)?;
        for d in &p.diagnostics {
            writeln!(out, "{d}")?;
        }
    }
    writeln!(out)?;
    writeln!(out, "{}", report.summary())
}

/// Runs the check on the program at `root` and prints the diagnostics to `out`; returns the
/// exit code (see [`crate::exit_code`]).
pub fn run_check(root: &Path, as_of: NaiveDate, out: &mut dyn Write) -> i32 {
    let report = check_program(root, as_of);
    match write_report(&report, out) {
        Ok(()) => report.exit_code(),
        Err(_) => exit_code::OUTPUT_FAILED,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::fs;

    fn as_of() -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()
    }

    fn program_dir() -> tempfile::TempDir {
        let tmp = tempfile::tempdir().unwrap();
        fs::write(
            tmp.path().join("program.yaml"),
            "format_version: 1\nprogram: { id: demo-2026, title: Demo, start: 2026-04-01, end: 2026-09-30 }\nmodules: [ {id: trend} ]\n",
        )
        .unwrap();
        tmp
    }

    fn add(root: &Path, id: &str, files: &[(&str, &str)]) {
        let dir = root.join("participants").join(id);
        fs::create_dir_all(&dir).unwrap();
        for (n, t) in files {
            fs::write(dir.join(n), t).unwrap();
        }
    }

    fn profile(id: &str) -> String {
        format!("id: {id}\nsex: female\nage: 40\nheight: 165 cm\nenrolled: 2026-04-01\n")
    }

    fn run(root: &Path) -> (i32, String) {
        let mut out = Vec::new();
        let code = run_check(root, as_of(), &mut out);
        (code, String::from_utf8(out).unwrap())
    }

    #[test]
    fn clean_program_exits_zero() {
        let tmp = program_dir();
        add(tmp.path(), "P1", &[("profile.yaml", &profile("P1"))]);
        add(
            tmp.path(),
            "P2",
            &[
                ("profile.yaml", &profile("P2")),
                ("weights.csv", "date,weight,unit\n2026-04-02,80,kg\n"),
            ],
        );
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::SUCCESS, "{out}");
        assert!(out.contains("P1: usable\n"), "{out}");
        assert!(
            out.ends_with(
                "checked 2 participants: 2 usable, 0 with errors; 0 errors, 0 warnings\n"
            ),
            "{out}"
        );
    }

    #[test]
    fn warnings_and_errors_set_the_exit_code() {
        let tmp = program_dir();
        add(
            tmp.path(),
            "P1",
            &[
                ("profile.yaml", &profile("P1")),
                ("weights.csv", "date,weight,unit\n2027-04-02,80,kg\n"),
            ],
        );
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::WARNINGS, "{out}");
        assert!(out.contains("P1: usable (1 warning)"), "{out}");
        add(tmp.path(), "P0", &[("weights.csv", "date,weight,unit\n")]);
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PARTICIPANT_ERRORS, "{out}");
        assert!(out.contains("P0: not usable (1 error)"), "{out}");
        // Participants are reported in folder order.
        assert!(out.find("P0:").unwrap() < out.find("P1:").unwrap());
        assert!(
            out.contains("checked 2 participants: 1 usable, 1 with errors; 1 error, 1 warning"),
            "{out}"
        );
        let report = check_program(tmp.path(), as_of());
        assert_eq!(report.usable(), 1);
        assert_eq!(report.counts(), (1, 1));
    }

    #[test]
    fn invalid_program_or_missing_folder_exits_three() {
        let tmp = program_dir();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PROGRAM_INVALID, "{out}");
        assert!(out.contains("participants folder does not exist"), "{out}");
        fs::write(tmp.path().join("program.yaml"), "format_version: 1\n").unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PROGRAM_INVALID);
        assert!(out.contains("missing field `program`"), "{out}");
        assert!(out.contains("program.yaml is invalid"), "{out}");
    }
}

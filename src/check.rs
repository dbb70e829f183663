//! `cohortpress check`: load the program and every participant, and report every problem
//! without computing anything. [`check_program`] is also the loading step of a full run;
//! [`crate::cmd::check`] prints what it found.

use crate::diag::{self, Diagnostic};
use crate::modules::{self, ModuleSet};
use crate::participant::{self, LoadedParticipant};
use crate::program::{self, Program};
use chrono::NaiveDate;
use rayon::prelude::*;
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
    /// Problems of the folder the group-report ledger would be kept in (filled by
    /// [`crate::cmd::check`], which knows the options): a run stops on them, with exit code 6,
    /// before any participant is computed.
    pub ledger: Vec<Diagnostic>,
    /// Problems of the program's own report templates that show only on a page made from them
    /// (filled by [`crate::cmd::check`]): a participant's page without the cautions, on which a
    /// run stops with exit code 6 and publishes nothing.
    pub templates: Vec<Diagnostic>,
    /// Problems of the output folder a run would stop on with exit code 6 (filled by
    /// [`crate::cmd::check`]): the folder it is written in cannot be written.
    pub output: Vec<Diagnostic>,
    /// Problems of the temporary folder (`TMPDIR`) the program's external modules would run
    /// in: a run stops on them with exit code 6 before any participant is computed.
    pub work_folder: Vec<Diagnostic>,
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
            .chain(&self.work_folder)
            .chain(&self.output)
            .chain(&self.ledger)
            .chain(&self.templates)
            .chain(self.participants.iter().flat_map(|p| &p.diagnostics))
    }

    /// (errors, warnings) over every diagnostic.
    pub fn counts(&self) -> (usize, usize) {
        let all: Vec<Diagnostic> = self.all_diagnostics().cloned().collect();
        diag::count(&all)
    }

    /// Participant folders refused as a whole while listing `participants/` (a link, a name
    /// that is no id): not usable, as a run leaves them out ([`participant::is_refused_folder`]).
    pub fn refused_folders(&self) -> usize {
        self.discovery
            .iter()
            .filter(|d| participant::is_refused_folder(d))
            .count()
    }

    /// The one-line summary printed last. The folders refused while listing `participants/`
    /// are counted among the participants not usable, as a run counts them left out.
    pub fn summary(&self) -> String {
        let n = self.participants.len() + self.refused_folders();
        let usable = self.usable();
        let (e, w) = self.counts();
        format!(
            "checked {n} participant{}: {usable} usable, {} not usable; {e} error{}, {w} warning{}",
            plural(n),
            n - usable,
            plural(e),
            plural(w)
        )
    }
}

pub(crate) fn plural(n: usize) -> &'static str {
    if n == 1 { "" } else { "s" }
}

/// Everything `run`, `merge` and `check` validate about the program itself, in one place so
/// the three refuse the same programs with the same messages and exit code: the size of
/// `program.yaml`, the file and its semantic checks ([`program::load_program`]), then its
/// `modules:` list and their settings ([`modules::build_module_set`]: unknown ids, bad
/// settings, order, external handshakes, settings two modules must agree on).
/// Returns the program, its module set and the module warnings, or every problem found.
///
/// A program with external modules needs a usable temporary folder (`TMPDIR`) to start them
/// in: without one, that is the error ([`LoadError::WorkFolder`], exit code 6 like a folder a
/// run writes that cannot be used), not the program's.
pub fn load_program_checked(
    root: &Path,
) -> Result<(Program, ModuleSet, Vec<Diagnostic>), LoadError> {
    let file = root.join(program::load::PROGRAM_FILE);
    if let Err(m) = crate::limits::check_size(&file) {
        return Err(LoadError::Program(vec![Diagnostic::error(
            program::load::PROGRAM_FILE,
            m,
        )]));
    }
    let program = program::load_program(root).map_err(LoadError::Program)?;
    if program.def.modules.iter().any(|m| m.command.is_some())
        && let Some(d) = modules::external::work_folder_problem()
    {
        return Err(LoadError::WorkFolder(Box::new(program), Box::new(d)));
    }
    let (modules, warnings) = modules::build_module_set(&program).map_err(LoadError::Program)?;
    Ok((program, modules, warnings))
}

/// Why [`load_program_checked`] gave no program to run.
#[derive(Debug)]
pub enum LoadError {
    /// `program.yaml` or its modules are invalid: every problem (exit code 3).
    Program(Vec<Diagnostic>),
    /// The program is valid as far as it was read, but the temporary folder its external
    /// modules would run in cannot be used (exit code 6): the program read, and the problem.
    WorkFolder(Box<Program>, Box<Diagnostic>),
}

/// Loads the program at `root` (checked as a run checks it, modules included:
/// [`load_program_checked`]) and every participant (in parallel; results in folder order).
/// Reads only; nothing is computed or written.
pub fn check_program(root: &Path, as_of: NaiveDate) -> CheckReport {
    let (program, work_folder) = match load_program_checked(root) {
        Ok((p, _, _)) => (Ok(p), Vec::new()),
        Err(LoadError::Program(d)) => (Err(d), Vec::new()),
        // The participants are still checked: they do not depend on the modules.
        Err(LoadError::WorkFolder(p, d)) => (Ok(*p), vec![*d]),
    };
    let Ok(prog) = &program else {
        return CheckReport {
            program,
            participants: Vec::new(),
            discovery: Vec::new(),
            ledger: Vec::new(),
            templates: Vec::new(),
            output: Vec::new(),
            work_folder,
        };
    };
    let (dirs, discovery) = participant::discover(prog);
    let mut participants: Vec<LoadedParticipant> = dirs
        .par_iter()
        .map(|d| participant::load_participant(prog, d, as_of))
        .collect();
    // One person's weigh-ins in two folders: the same errors a run gives (and its exit code),
    // over the same folders: every folder of the program, usable or not (a run leaves a folder
    // out of the group when its copy's profile is broken, and `check` said nothing of it).
    let same = participant::copied_weigh_ins(&dirs);
    for d in same {
        if let Some(p) = participants
            .iter_mut()
            .find(|p| d.participant.as_deref() == Some(p.id.as_str()))
        {
            p.diagnostics.push(d);
        }
    }
    let mut discovery = discovery;
    discovery.extend(participant::group_keys_nobody_has(
        prog,
        participants
            .iter()
            .filter_map(|p| p.data.as_ref().map(|d| &d.profile.groups)),
    ));
    CheckReport {
        program,
        participants,
        discovery,
        ledger: Vec::new(),
        templates: Vec::new(),
        output: Vec::new(),
        work_folder,
    }
}

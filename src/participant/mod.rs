//! Participant folders: discovery, `profile.yaml`, the CSV files and their checks. (being written)

use crate::diag::Diagnostic;
use crate::program::Program;
use chrono::NaiveDate;
use cohortpress_metric_api::ParticipantData;
use std::path::PathBuf;

/// A participant folder found under `participants/`.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct ParticipantDir {
    /// The folder name, which must equal the profile's id.
    pub id: String,
    /// Absolute path of the folder.
    pub path: PathBuf,
}

/// One input file that was read, for the run manifest.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct InputFile {
    /// Path relative to the program folder.
    pub path: String,
    /// blake3 hash of the bytes, hex.
    pub blake3: String,
    /// Size in bytes.
    pub bytes: u64,
}

/// The result of loading one participant folder.
#[derive(Debug, Clone)]
pub struct LoadedParticipant {
    /// Folder name.
    pub id: String,
    /// The checked data; `None` when an error makes the participant unusable.
    pub data: Option<ParticipantData>,
    /// Every problem found, errors and warnings.
    pub diagnostics: Vec<Diagnostic>,
    /// Files read.
    pub files: Vec<InputFile>,
}

/// Lists the participant folders under `ROOT/participants/`, sorted by name. Entries that are not
/// usable folders (bad names, files, links) are reported as diagnostics.
pub fn discover(program: &Program) -> (Vec<ParticipantDir>, Vec<Diagnostic>) {
    let _ = program;
    (Vec::new(), Vec::new())
}

/// Loads and checks one participant folder. Data dated after `as_of` are future data.
pub fn load_participant(program: &Program, dir: &ParticipantDir, as_of: NaiveDate) -> LoadedParticipant {
    let _ = (program, as_of);
    LoadedParticipant { id: dir.id.clone(), data: None, diagnostics: Vec::new(), files: Vec::new() }
}

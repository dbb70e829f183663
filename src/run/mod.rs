//! A run: its plan ([`plan`]), execution ([`execute`]), shards and merge ([`shard`]), the
//! per-participant partial results they share ([`partial`]) and the manifest ([`manifest`]).
//!
//! Nothing here prints or knows exit codes: a run ends in one [`Outcome`], which
//! [`crate::cmd`] reports and maps to an exit code.

pub mod execute;
pub mod manifest;
pub mod partial;
pub mod plan;
pub mod shard;

use crate::diag::Diagnostic;
use crate::output::StagingError;

pub use plan::{MergeOptions, RunOptions, RunPlan};

/// How a run ended: its totals and timing, or why it could not complete.
pub type Outcome = Result<(RunSummary, Timing), RunError>;

/// Seconds spent in each phase of a run, reported in the log only (never in an output file, so
/// identical runs keep identical outputs).
#[derive(Debug, Clone, Copy, Default)]
pub struct Timing {
    /// Loading, modules and participant reports (all workers).
    pub participants_s: f64,
    /// Group statistics and group reports.
    pub group_s: f64,
    /// Tidy metrics files.
    pub tidy_s: f64,
    /// Manifest and the swap into place.
    pub commit_s: f64,
}

/// Totals of a finished run ([`crate::cmd`] maps them to an exit code).
#[derive(Debug, Default, Clone, serde::Serialize)]
pub struct RunSummary {
    /// Participant folders found (after `--only`).
    pub participants: usize,
    /// Participants with a report.
    pub reported: usize,
    /// Participants with an input error: left out (an unusable profile), or reported without a
    /// file that could not be used.
    pub participants_with_errors: usize,
    /// Module failures (participant × module).
    pub module_failures: usize,
    /// Input warnings.
    pub warnings: usize,
    /// Warnings about the participants folder (stray files, links).
    pub program_warnings: usize,
    /// Participant folders refused while listing `participants/` (a link, a name that is no
    /// usable id: [`crate::participant::is_refused_folder`]).
    pub skipped_folders: usize,
}

/// Who named what a run refuses: the command line or `program.yaml`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Blame {
    /// A wrong command line (an option, `--out`, `--only`, the shards given to `merge`).
    CommandLine,
    /// The program folder (`program.yaml`, its `report.out`, a missing `participants/`).
    Program,
    /// The machine the run is started on: a folder it needs besides the output (the temporary
    /// folder external modules run in) cannot be used (exit code 6, as for the output folder).
    Environment,
}

/// A run that could not complete.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
    /// The plan cannot be made: the program or the command line is invalid (every problem).
    #[error("{}", diagnostics.iter().map(|d| d.to_string()).collect::<Vec<_>>().join("\n"))]
    Invalid {
        /// Who is to blame.
        by: Blame,
        /// Every problem found.
        diagnostics: Vec<Diagnostic>,
    },
    /// Another run holds the lock.
    #[error("{0}")]
    Locked(String),
    /// Writing outputs failed; the previous outputs are intact.
    #[error("writing outputs failed: {0}")]
    Output(String),
    /// Rendering a report failed (a template error, for instance).
    #[error("rendering failed: {0}")]
    Render(String),
    /// The run may not write where it was asked to, or cannot run on these inputs; nothing was
    /// written and the previous output is untouched.
    #[error("{message}")]
    Refused {
        /// What is wrong and what to do.
        message: String,
        /// Who is to blame.
        by: Blame,
    },
}

impl From<StagingError> for RunError {
    fn from(e: StagingError) -> Self {
        match e {
            StagingError::Locked(m) => RunError::Locked(m),
            StagingError::Refused(m) | StagingError::Partial(m) => RunError::Refused {
                message: m,
                by: Blame::CommandLine,
            },
            other => {
                let hint = match &other {
                    StagingError::Io { source, .. } | StagingError::Write { source, .. } => {
                        storage_hint(source.kind())
                    }
                    _ => "",
                };
                RunError::Output(format!("{other}{hint}"))
            }
        }
    }
}

/// What to do about an output the disk refused, for the log's line: a monthly cron run that
/// filled its disk logged "…/participants/SG-007.html: No space left on device (os error 28);
/// the previous outputs … were left as they were", and one on a file system remounted
/// read-only "…/.reports.lock: Read-only file system (os error 30)", with nothing on what to
/// do (tryout24). A run needs room for a second copy: it writes the new output beside the
/// previous one and swaps them only when it is complete.
fn storage_hint(kind: std::io::ErrorKind) -> &'static str {
    match kind {
        std::io::ErrorKind::StorageFull | std::io::ErrorKind::QuotaExceeded => {
            "; what to do: free space on the disk that holds the output folder (or raise the \
             quota) and run again: a run writes its whole new output beside the previous one \
             before it puts it in place, so it needs room for both"
        }
        std::io::ErrorKind::ReadOnlyFilesystem => {
            "; what to do: the output folder's file system is mounted read-only (a disk \
             remounted read-only after errors should be checked first); make it writable, or \
             name a folder elsewhere with --out, and run again"
        }
        _ => "",
    }
}

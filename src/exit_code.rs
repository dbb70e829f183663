//! Documented process exit codes. When several apply, the highest number wins.
//! Mirrored in README.md (section "Exit codes") and in `cohortpress --help`.

/// Everything was clean and every output was written.
pub const SUCCESS: i32 = 0;
/// The run completed, but some inputs gave warnings (values dropped or suspicious).
pub const WARNINGS: i32 = 1;
/// The command line was wrong (clap's usage errors also exit with 2).
pub const USAGE: i32 = 2;
/// `program.yaml` (or the program folder itself) is invalid; nothing was computed.
pub const PROGRAM_INVALID: i32 = 3;
/// Some inputs had errors: a participant whose profile is unusable, or a file that could not be
/// used, was left out; everything else was processed (participants without the lost file).
pub const PARTICIPANT_ERRORS: i32 = 4;
/// A metric module (built-in or external) failed for some participants; their other
/// modules' results and reports were still written.
pub const MODULE_FAILED: i32 = 5;
/// Writing outputs failed; the previous outputs were left as they were. From `check`: the
/// group-report ledger's folder cannot be used, so a run would stop before computing anything,
/// or a participant page made from the program's own templates lacks the cautions.
pub const OUTPUT_FAILED: i32 = 6;
/// Another run holds the lock on the output folder (or, for `import fhir`, another import is
/// writing into the same program folder).
pub const LOCKED: i32 = 7;
/// An internal error (a bug): please report it.
pub const INTERNAL: i32 = 70;

/// What a command found, in the terms the exit codes speak. `check`, `run` and `merge` all map
/// their outcome to a code through [`Outcome::exit_code`], so the same inputs give the same code
/// from each of them.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Outcome {
    /// `program.yaml` or the participants folder is unusable: nothing can be computed.
    pub program_invalid: bool,
    /// Participants (or participant folders) left out because of errors in their inputs.
    pub participants_left_out: usize,
    /// A folder the run writes cannot be used: from `check`, the group-report ledger's folder,
    /// on which a run stops before computing anything.
    pub output_unusable: bool,
    /// Module failures (participant × module); `check` runs no modules.
    pub module_failures: usize,
    /// Input warnings (values dropped or suspicious, stray files).
    pub warnings: usize,
}

impl Outcome {
    /// The documented code: the highest that applies.
    pub fn exit_code(&self) -> i32 {
        if self.program_invalid {
            PROGRAM_INVALID
        } else if self.output_unusable {
            OUTPUT_FAILED
        } else if self.module_failures > 0 {
            MODULE_FAILED
        } else if self.participants_left_out > 0 {
            PARTICIPANT_ERRORS
        } else if self.warnings > 0 {
            WARNINGS
        } else {
            SUCCESS
        }
    }
}

/// One line per code, for `--help` and the README.
pub const TABLE: &[(i32, &str)] = &[
    (
        SUCCESS,
        "clean: every input was usable and every output was written",
    ),
    (
        WARNINGS,
        "done, with warnings about some inputs (values dropped or suspicious)",
    ),
    (USAGE, "the command line was wrong"),
    (
        PROGRAM_INVALID,
        "program.yaml or the program folder is invalid; nothing was computed",
    ),
    (
        PARTICIPANT_ERRORS,
        "some inputs had errors: a participant (unusable profile) or a file was left out; the rest was processed",
    ),
    (
        MODULE_FAILED,
        "a metric module failed for some participants; the rest of the run went on",
    ),
    (
        OUTPUT_FAILED,
        "writing outputs failed (a full disk, a file-size limit such as `ulimit -f`, a read-only folder, a failed swap into place, a ledger that cannot be saved: the message names the file by the output folder's path (the ledger by `ledger.json`) and says the previous outputs were left as they were); previous outputs were left intact (from `check`: the output folder or the group-report ledger's folder cannot be written or used, or a participant page from the program's own templates lacks the cautions, so a run would stop); also, before anything is computed, when the temporary folder external modules run in (`TMPDIR`, else `/tmp`) cannot be used",
    ),
    (
        LOCKED,
        "another run holds the lock on the output folder (for `import fhir`: another import is writing into the same program folder)",
    ),
    (INTERNAL, "internal error (a bug)"),
];

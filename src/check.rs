//! `cohortpress check`: load everything and report every problem. (being written)

use chrono::NaiveDate;
use std::io::Write;
use std::path::Path;

/// Runs the check on the program at `root` and prints the diagnostics to `out`; returns the
/// exit code (see [`crate::exit_code`]).
pub fn run_check(root: &Path, as_of: NaiveDate, out: &mut dyn Write) -> i32 {
    let _ = (root, as_of, out);
    crate::exit_code::INTERNAL
}

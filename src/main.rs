//! The `cohortpress` binary: parse the command line, hand it to [`cmd::dispatch`], and turn a
//! panic into the documented exit code.

use clap::Parser;
use cohortpress::cmd::{self, cli::Cli};
use cohortpress::exit_code;
use std::process::ExitCode;

fn main() -> ExitCode {
    // Processes that external modules leave behind are adopted and stopped, up to the end.
    let _modules = cohortpress::modules::external::Containment::install();
    // A command line clap refuses is reported by `cmd`: as a JSON line when the JSON log was
    // asked for (a cron job's log collector parses every line), else as clap prints it.
    let args: Vec<std::ffi::OsString> = std::env::args_os().collect();
    let cli = match Cli::try_parse_from(&args) {
        Ok(cli) => cli,
        Err(e) => return ExitCode::from(cmd::command_line_refused(&e, &args) as u8),
    };
    // A file-size limit (`ulimit -f`) makes the kernel send SIGXFSZ, whose default action ends
    // the process in the middle of a write, without a word and with the staging folder left
    // behind. With the signal caught, the write fails with EFBIG instead, and the run ends as
    // on any failed write: a message naming the file, the previous output intact. (A caught
    // signal is reset to its default in external modules' processes.)
    #[cfg(unix)]
    if let Err(e) = signal_hook::flag::register(
        signal_hook::consts::SIGXFSZ,
        std::sync::Arc::new(std::sync::atomic::AtomicBool::new(false)),
    ) {
        eprintln!(
            "warning: cannot catch SIGXFSZ ({e}); a file-size limit would end a run without a message"
        );
    }
    // A panic anywhere (a bug) ends the command with the documented code 70 and one line on
    // standard error; a run's staging folder is removed as the stack unwinds, so the previous
    // output stays as it was.
    std::panic::set_hook(Box::new(|info| {
        let place = info
            .location()
            .map(|l| format!(" at {}:{}", l.file(), l.line()))
            .unwrap_or_default();
        let what = info
            .payload()
            .downcast_ref::<&str>()
            .map(|s| s.to_string())
            .or_else(|| info.payload().downcast_ref::<String>().cloned())
            .unwrap_or_else(|| "panic".into());
        eprintln!(
            "internal error (a bug in cohortpress, exit {}): {}{place}; previous outputs were \
             left intact. Please report it with the log above (run again with \
             COHORTPRESS_LOG=debug for more).",
            exit_code::INTERNAL,
            what.escape_debug()
        );
    }));
    let code = match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| cmd::dispatch(cli))) {
        Ok(code) => code,
        Err(_) => exit_code::INTERNAL,
    };
    ExitCode::from(code as u8)
}

//! The `cohortpress` binary: parse the command line, set up logging, call the library, map the
//! outcome to a documented exit code.

use clap::Parser;
use cohortpress::cmd::cli::{Cli, Command, LogFormat, TemplatesAction};
use cohortpress::exit_code;
use std::process::ExitCode;

fn main() -> ExitCode {
    // Processes that external modules leave behind are adopted and stopped, up to the end.
    let _modules = cohortpress::modules::external::Containment::install();
    let cli = Cli::parse();
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
    let code = match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| dispatch(cli))) {
        Ok(code) => code,
        Err(_) => exit_code::INTERNAL,
    };
    ExitCode::from(code as u8)
}

/// Runs one command and returns its exit code.
fn dispatch(cli: Cli) -> i32 {
    debug_panic_hook();
    match cli.command {
        Command::Check {
            program,
            as_of,
            format,
            verbose,
        } => {
            init_logging(false, LogFormat::Text);
            let as_of = as_of.unwrap_or_else(today);
            let stdout = std::io::stdout();
            let opts = cohortpress::check::CheckOptions {
                json: format == cohortpress::cmd::cli::CheckFormat::Json,
                verbose,
            };
            cohortpress::check::run_check_with(&program, as_of, &opts, &mut stdout.lock())
        }
        Command::Run(args) => {
            init_logging(args.quiet, args.log_format);
            cohortpress::run::execute::run_command(&args, today())
        }
        Command::Merge(args) => {
            init_logging(args.quiet, args.log_format);
            cohortpress::run::shard::merge_command(&args)
        }
        Command::Import {
            format: cohortpress::cmd::cli::ImportFormat::Fhir { files, out, ids },
        } => cohortpress::import::fhir::import_command(&files, &out, ids.as_deref()),
        Command::Modules { program } => {
            cohortpress::run::execute::modules_command(program.as_deref())
        }
        Command::Templates {
            action: TemplatesAction::Dump { dir },
        } => cohortpress::report::templates::dump_command(&dir),
        Command::DemoProgram {
            out,
            participants,
            seed,
            no_defects,
        } => {
            let opts = cohortpress::demo::DemoOptions {
                participants,
                seed,
                with_defects: !no_defects,
            };
            match cohortpress::demo::generate(&out, &opts) {
                Ok(s) => {
                    println!(
                        "wrote a demo program with {} participants ({} files, {} bytes) to {}",
                        s.participants,
                        s.files,
                        s.bytes,
                        out.display()
                    );
                    exit_code::SUCCESS
                }
                Err(e) => {
                    eprintln!(
                        "error: cannot write the demo program to {}: {e}",
                        out.display()
                    );
                    // A refused folder is a wrong command line, like a refused `--out`.
                    match e.kind() {
                        std::io::ErrorKind::AlreadyExists | std::io::ErrorKind::InvalidInput => {
                            exit_code::USAGE
                        }
                        _ => exit_code::OUTPUT_FAILED,
                    }
                }
            }
        }
    }
}

/// Debug builds only: `COHORTPRESS_DEBUG_PANIC=1` panics at the start of a command, so the
/// test suite can check that a panic maps to exit code 70. Release builds have no such hook.
fn debug_panic_hook() {
    #[cfg(debug_assertions)]
    if std::env::var_os("COHORTPRESS_DEBUG_PANIC").is_some() {
        panic!("COHORTPRESS_DEBUG_PANIC is set");
    }
}

fn today() -> chrono::NaiveDate {
    chrono::Local::now().date_naive()
}

/// Logs go to standard error; the level comes from `COHORTPRESS_LOG` (e.g. `debug`), else
/// `info` (`warn` with `--quiet`).
fn init_logging(quiet: bool, format: LogFormat) {
    use tracing_subscriber::EnvFilter;
    let default = if quiet { "warn" } else { "info" };
    let filter = EnvFilter::try_from_env("COHORTPRESS_LOG")
        .unwrap_or_else(|_| EnvFilter::new(format!("{default},handlebars=warn")));
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_target(false)
        .with_ansi(std::io::IsTerminal::is_terminal(&std::io::stderr()))
        .without_time();
    let _ = match format {
        LogFormat::Text => builder.try_init(),
        LogFormat::Json => builder.json().try_init(),
    };
}

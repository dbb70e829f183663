//! Commands: the only code that prints to the terminal or turns an outcome into an exit code.
//! Each command converts its clap arguments ([`cli`]) into plain values, calls the library
//! ([`crate::run`], [`crate::check`], [`crate::import`], [`crate::demo`]) and reports.

pub mod check;
pub mod cli;
pub mod run;

use crate::exit_code;
use crate::import::fhir::ImportFailure;
use cli::{CheckFormat, Cli, Command, ImportFormat, LogFormat, TemplatesAction};
use std::path::{Path, PathBuf};

/// Runs one command and returns its exit code.
pub fn dispatch(cli: Cli) -> i32 {
    debug_panic_hook();
    match cli.command {
        Command::Check {
            program,
            as_of,
            format,
            verbose,
            state,
            out,
        } => {
            init_logging(false, LogFormat::Text);
            let as_of = as_of.unwrap_or_else(today);
            let stdout = std::io::stdout();
            let opts = check::CheckOptions {
                json: format == CheckFormat::Json,
                verbose,
                state,
                out,
            };
            check::run_check_with(&program, as_of, &opts, &mut stdout.lock())
        }
        Command::Run(args) => {
            init_logging(args.quiet, args.log_format);
            run::run_command(&args, today())
        }
        Command::Merge(args) => {
            init_logging(args.quiet, args.log_format);
            run::merge_command(&args)
        }
        Command::Import {
            format: ImportFormat::Fhir { files, out, ids },
        } => import_fhir(&files, &out, ids.as_deref()),
        Command::Modules { program } => run::modules_command(program.as_deref()),
        Command::Templates {
            action: TemplatesAction::Dump { dir },
        } => dump_templates(&dir),
        Command::DemoProgram {
            out,
            participants,
            seed,
            no_defects,
        } => {
            let opts = crate::demo::DemoOptions {
                participants,
                seed,
                with_defects: !no_defects,
            };
            match crate::demo::generate(&out, &opts) {
                Ok(s) => {
                    say(format_args!(
                        "wrote a demo program with {} participants ({} files, {} bytes) to {}",
                        s.participants,
                        s.files,
                        s.bytes,
                        out.display()
                    ));
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
        .with_ansi(std::io::IsTerminal::is_terminal(&std::io::stderr()));
    // A JSON line carries its time (UTC): cron appends every month's run to one log file, whose
    // lines could not otherwise be told apart. Text lines, for a person at a terminal, stay
    // short. Output files never hold a clock time either way.
    let _ = match format {
        LogFormat::Text => builder.without_time().try_init(),
        LogFormat::Json => builder
            .with_timer(tracing_subscriber::fmt::time::SystemTime)
            .json()
            .try_init(),
    };
}

/// `cohortpress import fhir FILE… --out PROGRAM [--ids MAP.csv]`.
fn import_fhir(files: &[PathBuf], out: &Path, ids: Option<&Path>) -> i32 {
    match crate::import::fhir::import(files, out, ids) {
        Ok(summary) => {
            say(format_args!("{summary}"));
            exit_code::SUCCESS
        }
        Err((why, msg)) => {
            eprintln!("error: {msg}");
            match why {
                ImportFailure::Usage => exit_code::USAGE,
                ImportFailure::Write => exit_code::OUTPUT_FAILED,
            }
        }
    }
}

/// `cohortpress templates dump DIR`: writes the built-in templates out to start from. Existing
/// files are never overwritten.
fn dump_templates(dir: &Path) -> i32 {
    let mut written = 0;
    for (name, text) in crate::report::templates::BUILTIN {
        let path = dir.join(name);
        match crate::output::write_new_file(dir, name, text.as_bytes()) {
            Ok(true) => written += 1,
            Ok(false) => eprintln!("skipped {} (exists, or is a link)", path.display()),
            Err((p, e)) => {
                eprintln!("error: {}: {e}", p.display());
                return exit_code::OUTPUT_FAILED;
            }
        }
    }
    say(format_args!(
        "wrote {written} template files to {}; point report.templates in program.yaml at this folder (relative to the program folder)",
        dir.display()
    ));
    exit_code::SUCCESS
}

/// Writes one message and a newline to standard output (`print` adds no newline). A reader that
/// stopped early (`cohortpress modules | head`) is not a failure of the command: the rest is
/// dropped, as other Unix filters do, instead of the panic `println!` gives on a closed pipe.
pub(crate) fn say(message: std::fmt::Arguments<'_>) {
    print(format_args!("{message}\n"));
}

/// [`say`] without the newline.
pub(crate) fn print(text: std::fmt::Arguments<'_>) {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    match out.write_fmt(text).and_then(|()| out.flush()) {
        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
            eprintln!("error: could not write to standard output: {e}")
        }
        _ => {}
    }
}

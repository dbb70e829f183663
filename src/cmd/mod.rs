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
            let as_of = as_of.unwrap_or_else(|| today(&program, true));
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
            let today = match args.as_of {
                Some(d) => d,
                None => today(&args.program, false),
            };
            run::run_command(&args, today)
        }
        Command::Merge(args) => {
            init_logging(args.quiet, args.log_format);
            run::merge_command(&args)
        }
        Command::Import {
            format: ImportFormat::Fhir { files, out, ids },
        } => {
            // For the line an interrupt leaves (the import logs nothing else).
            init_logging(false, LogFormat::Text);
            import_fhir(&files, &out, ids.as_deref())
        }
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

/// Reports a command line clap refused and returns its exit code. With the JSON log asked for
/// (`--log-format json` among the arguments), the refusal is a JSON line at ERROR, followed by
/// the line that ends every stopped run's log and carries the exit code: a cron job's log
/// collector parses every line as JSON, and clap's usage text broke it. Otherwise, and for
/// `--help` and `--version`, clap prints as usual.
pub fn command_line_refused(e: &clap::Error, args: &[std::ffi::OsString]) -> i32 {
    if !e.use_stderr() || !asks_for_json_log(args) {
        let _ = e.print();
        return e.exit_code();
    }
    init_logging(false, LogFormat::Json);
    let text = e.render().to_string();
    let text = text
        .lines()
        .map(str::trim)
        .filter(|l| !l.is_empty())
        .collect::<Vec<_>>()
        .join(" | ");
    let text = text.strip_prefix("error: ").unwrap_or(&text);
    tracing::error!("the command line was refused: {text}");
    tracing::error!(
        exit_code = exit_code::USAGE,
        "stopped: the output folder was left as it was"
    );
    exit_code::USAGE
}

/// Whether the arguments ask for the JSON log (`--log-format json` or `--log-format=json`,
/// the last one given, before any `--`), judged without clap, which has refused them.
fn asks_for_json_log(args: &[std::ffi::OsString]) -> bool {
    let mut json = false;
    let mut it = args.iter().skip(1).map(|a| a.to_string_lossy());
    while let Some(a) = it.next() {
        if a == "--" {
            break;
        }
        if a == "--log-format" {
            json = it.next().is_some_and(|v| v == "json");
        } else if let Some(v) = a.strip_prefix("--log-format=") {
            json = v == "json";
        }
    }
    json
}

/// Debug builds only: `COHORTPRESS_DEBUG_PANIC=1` panics at the start of a command, so the
/// test suite can check that a panic maps to exit code 70. Release builds have no such hook.
fn debug_panic_hook() {
    #[cfg(debug_assertions)]
    if std::env::var_os("COHORTPRESS_DEBUG_PANIC").is_some() {
        panic!("COHORTPRESS_DEBUG_PANIC is set");
    }
}

/// Today for the program in folder `program`: the date in its `input.time_zone` when it sets
/// one, else in the machine's time zone, read without reading a file `TZ` names, else UTC
/// ([`crate::program::Program::date_at`]); the machine's when the program cannot be loaded (the
/// command then says why). Logged: `run` always says which zone gave the day, `check` only when
/// the machine's zone could not be used.
fn today(program: &Path, quiet_unless_unusual: bool) -> chrono::NaiveDate {
    let now = chrono::Utc::now();
    let (date, how) = crate::program::load_program(program)
        .map_or_else(|_| crate::program::machine_date_at(now), |p| p.date_at(now));
    if how.unusual {
        tracing::warn!("today is {date}, {} (no --as-of given)", how.source);
    } else if quiet_unless_unusual {
        tracing::debug!("today is {date}, {} (no --as-of given)", how.source);
    } else {
        tracing::info!("today is {date}, {} (no --as-of given)", how.source);
    }
    date
}

/// Logs go to standard error; the level comes from `COHORTPRESS_LOG` (e.g. `debug`, see
/// [`log_directives`]), else `info` (`warn` with `--quiet`).
fn init_logging(quiet: bool, format: LogFormat) {
    use tracing_subscriber::EnvFilter;
    let default = if quiet { "warn" } else { "info" };
    let filter = std::env::var("COHORTPRESS_LOG")
        .ok()
        .and_then(|v| EnvFilter::try_new(log_directives(&v)?).ok())
        .unwrap_or_else(|| EnvFilter::new(format!("{default},handlebars=warn")));
    let builder = tracing_subscriber::fmt()
        .with_env_filter(filter)
        .with_writer(std::io::stderr)
        .with_target(false)
        .with_ansi(std::io::IsTerminal::is_terminal(&std::io::stderr()));
    // A JSON line carries its time (UTC): cron appends every month's run to one log file, whose
    // lines could not otherwise be told apart. Text lines, for a person at a terminal, stay
    // short. Output files never hold a clock time either way.
    let _ = match format {
        LogFormat::Text => builder.without_time().fmt_fields(TextFields).try_init(),
        LogFormat::Json => builder
            .with_timer(tracing_subscriber::fmt::time::SystemTime)
            .json()
            .try_init(),
    };
}

/// `COHORTPRESS_LOG` as filter directives: a bare level (`debug`, `trace`, `info`) is
/// cohortpress's own (its crates' targets all start with `cohortpress`), and every library
/// stays at warnings. As given, `debug` also turned on the template engine's and the HTML
/// parser's debug lines, which copy each report's text into the log: 26,000 lines for 13
/// participants, with their names and weights, in a log file that is often less private than
/// the 0600 reports, and that the panic message asks to be sent with a bug report. A directive
/// that names a target (`handlebars=debug`) is kept as written. `None` when empty.
fn log_directives(var: &str) -> Option<String> {
    let mut directives = Vec::new();
    // Libraries log warnings, or less when a quieter level is asked for.
    let mut others = "warn".to_string();
    for d in var.split(',').map(str::trim).filter(|d| !d.is_empty()) {
        let level = d.to_ascii_lowercase();
        if ["trace", "debug", "info", "warn", "error", "off"].contains(&level.as_str()) {
            if ["error", "off"].contains(&level.as_str()) {
                others = level.clone();
            }
            directives.push(format!("cohortpress={level}"));
        } else {
            directives.push(d.to_string());
        }
    }
    if directives.is_empty() {
        return None;
    }
    directives.insert(0, others);
    Some(directives.join(","))
}

/// The text log's fields: as tracing-subscriber's default, without the fields that say where a
/// diagnostic is ([`crate::diag::LOG_FIELDS`]) and others the message already says in words;
/// the JSON log keeps them as fields of their own.
struct TextFields;

/// [`TextFields`]' visitor: the default one, skipping those fields.
struct TextVisitor<'w>(tracing_subscriber::fmt::format::DefaultVisitor<'w>);

impl TextVisitor<'_> {
    fn shown(field: &tracing::field::Field) -> bool {
        // The module a failure concerns, and the counts of a run's last line, are in its words.
        const SAID: [&str; 5] = [
            "module",
            "reported",
            "participants_with_errors",
            "module_failures",
            "warnings",
        ];
        let name = field.name();
        !(crate::diag::LOG_FIELDS.contains(&name) || SAID.contains(&name))
    }
}

impl<'w> tracing_subscriber::field::MakeVisitor<tracing_subscriber::fmt::format::Writer<'w>>
    for TextFields
{
    type Visitor = TextVisitor<'w>;
    fn make_visitor(&self, target: tracing_subscriber::fmt::format::Writer<'w>) -> Self::Visitor {
        TextVisitor(tracing_subscriber::fmt::format::DefaultVisitor::new(
            target, true,
        ))
    }
}

impl tracing::field::Visit for TextVisitor<'_> {
    fn record_str(&mut self, field: &tracing::field::Field, value: &str) {
        if Self::shown(field) {
            self.0.record_str(field, value)
        }
    }
    fn record_error(
        &mut self,
        field: &tracing::field::Field,
        value: &(dyn std::error::Error + 'static),
    ) {
        if Self::shown(field) {
            self.0.record_error(field, value)
        }
    }
    fn record_debug(&mut self, field: &tracing::field::Field, value: &dyn std::fmt::Debug) {
        if Self::shown(field) {
            self.0.record_debug(field, value)
        }
    }
}

impl tracing_subscriber::field::VisitOutput<std::fmt::Result> for TextVisitor<'_> {
    fn finish(self) -> std::fmt::Result {
        self.0.finish()
    }
}

impl tracing_subscriber::field::VisitFmt for TextVisitor<'_> {
    fn writer(&mut self) -> &mut dyn std::fmt::Write {
        self.0.writer()
    }
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
                ImportFailure::Locked => exit_code::LOCKED,
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

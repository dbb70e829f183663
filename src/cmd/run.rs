//! `run`, `merge` and `modules`: the command line turned into plain options, the run's outcome
//! into log lines and an exit code.

use crate::cmd::cli::{FormatArg, LogFormat, MergeArgs, RunArgs};
use crate::exit_code;
use crate::modules;
use crate::program::{self, Format};
use crate::run::{self, Blame, MergeOptions, RunError, RunOptions, RunSummary};
use chrono::NaiveDate;
use std::path::Path;
use std::time::Instant;

/// The plain options of `run` (no clap types past this point).
pub fn run_options(args: &RunArgs) -> RunOptions {
    RunOptions {
        program: args.program.clone(),
        period: args.period.clone(),
        from: args.from,
        to: args.to,
        as_of: args.as_of,
        out: args.out.clone(),
        only: args.only.clone(),
        jobs: args.jobs,
        formats: args
            .formats
            .iter()
            .map(|f| match f {
                FormatArg::Html => Format::Html,
                FormatArg::Pdf => Format::Pdf,
            })
            .collect(),
        incremental: args.incremental,
        shard: args.shard,
        group_readable: args.group_readable,
        state: args.state.clone(),
        new_ledger: args.new_ledger,
    }
}

/// The plain options of `merge`.
pub fn merge_options(args: &MergeArgs) -> MergeOptions {
    MergeOptions {
        program: args.program.clone(),
        shards: args.shards.clone(),
        out: args.out.clone(),
        group_readable: args.group_readable,
        state: args.state.clone(),
        new_ledger: args.new_ledger,
    }
}

/// The documented exit code of a finished run (see [`exit_code::Outcome`]).
pub fn summary_code(s: &RunSummary) -> i32 {
    exit_code::Outcome {
        program_invalid: false,
        participants_left_out: s.participants_with_errors + s.skipped_folders,
        output_unusable: false,
        module_failures: s.module_failures,
        warnings: s.warnings + s.program_warnings,
    }
    .exit_code()
}

/// The counts a finished run's last line gives, those [`summary_code`] judges by: the warnings
/// about the program folder count as warnings there too (a stray file alone made exit code 1
/// beside "0 warnings").
struct Counts {
    reported: usize,
    with_errors: usize,
    module_failures: usize,
    warnings: usize,
}

impl Counts {
    fn of(s: &RunSummary) -> Counts {
        Counts {
            reported: s.reported,
            with_errors: s.participants_with_errors + s.skipped_folders,
            module_failures: s.module_failures,
            warnings: s.warnings + s.program_warnings,
        }
    }

    /// Logs a run's or merge's last line, `what` then the counts as fields and the exit code:
    /// at INFO for a clean run, at WARN otherwise, so that a `--quiet` run (which logs from
    /// WARN) still ends with the line that carries its exit code.
    fn log_last_line(&self, code: i32, what: std::fmt::Arguments<'_>) {
        macro_rules! line {
            ($level:ident) => {
                tracing::$level!(
                    exit_code = code,
                    reported = self.reported,
                    participants_with_errors = self.with_errors,
                    module_failures = self.module_failures,
                    warnings = self.warnings,
                    "{what}"
                )
            };
        }
        if code == exit_code::SUCCESS {
            line!(info);
        } else {
            line!(warn);
        }
    }
}

impl std::fmt::Display for Counts {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "{} participants reported, {} with errors, {} module failures, {} warnings",
            self.reported, self.with_errors, self.module_failures, self.warnings
        )
    }
}

/// The documented exit code of a run that could not complete.
pub fn error_code(e: &RunError) -> i32 {
    let blamed = |by: &Blame| match by {
        Blame::CommandLine => exit_code::USAGE,
        Blame::Program => exit_code::PROGRAM_INVALID,
        Blame::Environment => exit_code::OUTPUT_FAILED,
    };
    match e {
        RunError::Invalid { by, .. } | RunError::Refused { by, .. } => blamed(by),
        RunError::Locked(_) => exit_code::LOCKED,
        RunError::Output(_) | RunError::Render(_) => exit_code::OUTPUT_FAILED,
    }
}

/// Reports why a run could not complete and returns its exit code. The problems of an invalid
/// plan are printed one by one (to the log with `as_log`, as `merge` does and as a run with
/// `--log-format json` does: a cron log of JSON lines must hold no line of plain text). In
/// the log, the last line is the one that carries the exit code, as a finished run's `done in`
/// line does, so a collector that keeps the lines but not the status sees the month stop.
fn report_failure(e: &RunError, as_log: bool) -> i32 {
    let code = error_code(e);
    match e {
        RunError::Invalid { diagnostics, .. } => {
            for d in diagnostics {
                if as_log {
                    // The log line's level says "ERROR" already: "ERROR error: merge: …"
                    // said it twice.
                    let text = d.to_string().replace('\n', " |");
                    tracing::error!("{}", text.strip_prefix("error: ").unwrap_or(&text));
                } else {
                    eprintln!("{d}");
                }
            }
            if !as_log {
                return code;
            }
        }
        other => tracing::error!("{other:#}"),
    }
    tracing::error!(
        exit_code = code,
        "stopped: the output folder was left as it was"
    );
    code
}

/// `cohortpress run`.
pub fn run_command(args: &RunArgs, today: NaiveDate) -> i32 {
    let started = Instant::now();
    #[cfg(unix)]
    crate::modules::external::watch_interrupts(crate::modules::external::Operation::Run);
    let plan = match run::plan::plan(&run_options(args), today) {
        Ok(p) => p,
        Err(e) => return report_failure(&e, args.log_format == LogFormat::Json),
    };
    let plan_s = started.elapsed().as_secs_f64();
    match run::execute::execute(&plan) {
        Ok((summary, timing)) => {
            let ms = |s: f64| (s * 1000.0).round() / 1000.0;
            tracing::info!(
                plan_s = ms(plan_s),
                participants_s = ms(timing.participants_s),
                group_s = ms(timing.group_s),
                tidy_s = ms(timing.tidy_s),
                commit_s = ms(timing.commit_s),
                "timing in seconds per phase"
            );
            if let Some(done) = plan.ended_summary(summary.reported) {
                tracing::info!("{done}");
            }
            let code = summary_code(&summary);
            // The exit code rides on the last line too, for log collectors that keep the
            // JSON lines but not the process's status, and so do the counts behind it.
            let c = Counts::of(&summary);
            c.log_last_line(
                code,
                format_args!(
                    "done in {:.1} s: {}; outputs in {}",
                    started.elapsed().as_secs_f64(),
                    c,
                    plan.out_dir.display()
                ),
            );
            code
        }
        Err(e) => report_failure(&e, true),
    }
}

/// `cohortpress modules [PROGRAM]`.
pub fn modules_command(program: Option<&Path>) -> i32 {
    let loaded = match program {
        Some(root) => match program::load_program(root) {
            Ok(p) => {
                // External modules are asked for their spec: they need a temporary folder.
                if p.def.modules.iter().any(|m| m.command.is_some())
                    && let Some(d) = crate::modules::external::work_folder_problem()
                {
                    eprintln!("{d}");
                    return exit_code::OUTPUT_FAILED;
                }
                Some(p)
            }
            Err(diags) => {
                for d in &diags {
                    eprintln!("{d}");
                }
                return exit_code::PROGRAM_INVALID;
            }
        },
        None => None,
    };
    super::print(format_args!(
        "{}",
        modules::describe_modules(loaded.as_ref())
    ));
    exit_code::SUCCESS
}

/// `cohortpress merge PROGRAM SHARD_DIR… [--out DIR]`.
pub fn merge_command(args: &MergeArgs) -> i32 {
    let started = Instant::now();
    #[cfg(unix)]
    crate::modules::external::watch_interrupts(crate::modules::external::Operation::Merge);
    let opts = merge_options(args);
    match run::shard::merge_shards(&opts) {
        Ok((summary, shards, plan)) => {
            let code = summary_code(&summary);
            let c = Counts::of(&summary);
            // The last line carries the exit code, as a run's does.
            c.log_last_line(
                code,
                format_args!(
                    "merged {} shards in {:.1} s: {}; outputs in {}",
                    shards,
                    started.elapsed().as_secs_f64(),
                    c,
                    plan.display()
                ),
            );
            code
        }
        Err(e) => report_failure(&e, true),
    }
}

//! The orchestrator: resolves a run plan, processes participants in parallel, aggregates the
//! group step, renders reports, and is the only code that writes output files.
//!
//! Outputs are written into a staging folder beside the output folder and moved into place only
//! when complete, so a run killed at any moment leaves the previous complete output intact (see
//! [`crate::output`]).
//!
//! Participants are streamed: each worker loads one participant, runs the modules, renders and
//! writes their reports, and keeps only their partial result ([`ParticipantRecord`]: the group
//! step's summary row, the tidy row, diagnostics and file hashes). Report bytes are dropped as
//! soon as they are written, so memory grows with the summary rows only. The partial results
//! are written to `cache/ID.json`, which `--incremental` and `merge` read back
//! ([`crate::run::partial`], [`crate::run::shard`]).

use crate::cmd::cli::{FormatArg, MergeArgs, RunArgs};
use crate::diag::{Diagnostic, Severity};
use crate::exit_code;
use crate::group::{self, GroupOptions, ParticipantSummary};
use crate::modules::{self, ModuleResults, ModuleSet};
use crate::output::{Access, OutputScope, OutputSet, OutputTarget, Staging, StagingError};
use crate::participant::{self, InputFile, ParticipantDir};
use crate::program::{self, DefaultPeriod, Format, Program};
use crate::report;
use crate::run::partial::{
    self, DiagRecord, InputRecord, ParticipantRecord, RunKey, SummaryRecord, TidyRecord,
};
use crate::run::shard::{self, ShardFile, ShardSpec};
use crate::tidy;
use chrono::{Datelike, NaiveDate};
use cohortpress_metric_api::{ParticipantData, Period};
use rayon::prelude::*;
use std::path::{Path, PathBuf};
use std::sync::Mutex;
use std::time::Instant;

/// Everything a run needs, resolved from the command line and `program.yaml`.
pub struct RunPlan {
    /// The checked program.
    pub program: Program,
    /// Its modules, settings resolved.
    pub modules: ModuleSet,
    /// The reporting period.
    pub period: Period,
    /// The day treated as today.
    pub as_of: NaiveDate,
    /// The output folder.
    pub out_dir: PathBuf,
    /// How the output folder was named (`--out` or `report.out`), for refusals.
    pub out_named_by: &'static str,
    /// Formats to write.
    pub formats: Vec<Format>,
    /// Only these participant ids (empty = all).
    pub only: Vec<String>,
    /// Worker threads.
    pub jobs: usize,
    /// Reuse unchanged participants' previous results (`--incremental`).
    pub incremental: bool,
    /// Process only this shard (`--shard K/N`).
    pub shard: Option<ShardSpec>,
    /// Who may read the outputs.
    pub access: Access,
    /// What the results depend on besides each participant's own files.
    pub key: RunKey,
    /// State folder of the group-report ledger (`--state`, default `<out>.ledger`).
    pub state_dir: PathBuf,
}

impl RunPlan {
    /// What this run puts in its output folder.
    pub fn scope(&self) -> OutputScope {
        if self.shard.is_some() {
            OutputScope::Shard
        } else if !self.only.is_empty() {
            OutputScope::Only
        } else {
            OutputScope::Complete
        }
    }

    /// The output folder with what it must never touch.
    pub fn output_target(&self) -> OutputTarget {
        OutputTarget::for_program(
            &self.program,
            self.out_dir.clone(),
            self.scope(),
            self.out_named_by,
        )
    }

    /// Takes the output folder for this run (see [`Staging::begin`]). A refusal names the
    /// folder; its exit code says who named it: the command line (2) or program.yaml (3).
    pub fn begin_staging(&self) -> Result<Staging, RunError> {
        Staging::begin(&self.output_target(), self.access).map_err(|e| match e {
            StagingError::Refused(m) => RunError::Refused {
                message: m,
                code: if self.out_named_by == "--out" {
                    exit_code::USAGE
                } else {
                    exit_code::PROGRAM_INVALID
                },
            },
            other => other.into(),
        })
    }
}

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

/// `cohortpress run`.
pub fn run_command(args: &RunArgs, today: NaiveDate) -> i32 {
    let started = Instant::now();
    let plan = match plan_from_args(args, today) {
        Ok(p) => p,
        Err((code, diags)) => {
            for d in &diags {
                eprintln!("{d}");
            }
            return code;
        }
    };
    let plan_s = started.elapsed().as_secs_f64();
    match execute(&plan) {
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
            tracing::info!(
                "done in {:.1} s: {} participants reported, {} with errors, {} module failures, {} warnings; outputs in {}",
                started.elapsed().as_secs_f64(),
                summary.reported,
                summary.participants_with_errors + summary.skipped_folders,
                summary.module_failures,
                summary.warnings,
                plan.out_dir.display()
            );
            summary.exit_code()
        }
        Err(e) => {
            tracing::error!("{e:#}");
            e.exit_code()
        }
    }
}

/// `cohortpress modules [PROGRAM]`.
pub fn modules_command(program: Option<&Path>) -> i32 {
    let loaded = match program {
        Some(root) => match program::load_program(root) {
            Ok(p) => Some(p),
            Err(diags) => {
                for d in &diags {
                    eprintln!("{d}");
                }
                return exit_code::PROGRAM_INVALID;
            }
        },
        None => None,
    };
    print!("{}", modules::describe_modules(loaded.as_ref()));
    exit_code::SUCCESS
}

type PlanError = (i32, Vec<Diagnostic>);

fn usage(message: String) -> PlanError {
    (
        exit_code::USAGE,
        vec![Diagnostic::error("command line", message)],
    )
}

/// Loads and checks the program (refusing an oversized `program.yaml` before reading it) and
/// its modules.
fn load_checked(root: &Path) -> Result<(Program, ModuleSet), PlanError> {
    let file = root.join(program::load::PROGRAM_FILE);
    if let Err(m) = crate::limits::check_size(&file) {
        return Err((
            exit_code::PROGRAM_INVALID,
            vec![Diagnostic::error(program::load::PROGRAM_FILE, m)],
        ));
    }
    let program = program::load_program(root).map_err(|d| (exit_code::PROGRAM_INVALID, d))?;
    let (modules, warnings) =
        modules::build_module_set(&program).map_err(|d| (exit_code::PROGRAM_INVALID, d))?;
    for w in &warnings {
        tracing::warn!("{w}");
    }
    Ok((program, modules))
}

/// Resolves the plan: loads and checks the program and its modules, the period and the output
/// folder.
pub fn plan_from_args(args: &RunArgs, today: NaiveDate) -> Result<RunPlan, PlanError> {
    let (program, modules) = load_checked(&args.program)?;
    let as_of = args.as_of.unwrap_or(today);
    let period = resolve_period(&program, as_of, args).map_err(usage)?;
    let (mut out_dir, out_named_by) = match &args.out {
        Some(o) => (o.clone(), "--out"),
        None => (program.root.join(&program.def.report.out), "report.out"),
    };
    if let (Some(s), None) = (args.shard, &args.out) {
        out_dir = shard::default_shard_out(&out_dir, s);
    }
    let formats = if args.formats.is_empty() {
        let mut f = program.def.report.formats.clone();
        f.sort();
        f.dedup();
        f
    } else {
        let mut f: Vec<Format> = args
            .formats
            .iter()
            .map(|f| match f {
                FormatArg::Html => Format::Html,
                FormatArg::Pdf => Format::Pdf,
            })
            .collect();
        f.sort();
        f.dedup();
        f
    };
    let jobs = args.jobs.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
    });
    if jobs == 0 {
        return Err(usage("--jobs must be at least 1".into()));
    }
    let key = run_key(&program, &modules, period, as_of, &formats)?;
    let state_dir =
        group::ledger::resolve_dir(args.state.as_deref(), &program, &out_dir).map_err(usage)?;
    Ok(RunPlan {
        program,
        modules,
        period,
        as_of,
        out_dir,
        out_named_by,
        formats,
        only: args.only.clone(),
        jobs,
        incremental: args.incremental,
        shard: args.shard,
        access: shard::access(args.group_readable),
        key,
        state_dir,
    })
}

/// The plan of `merge`: the program from the command line; period, as-of date and formats from
/// the shards' run key (the caller checks the recomputed key equals the shards').
pub fn plan_for_merge(
    args: &MergeArgs,
    key: &RunKey,
    only: Vec<String>,
) -> Result<RunPlan, PlanError> {
    let (program, modules) = load_checked(&args.program)?;
    let date = |s: &str| {
        s.parse::<NaiveDate>()
            .map_err(|_| usage(format!("shard.json holds an unreadable date `{s}`")))
    };
    let period = Period {
        from: date(&key.period_from)?,
        to: date(&key.period_to)?,
    };
    let as_of = date(&key.as_of)?;
    let mut formats = Vec::new();
    for f in &key.formats {
        formats.push(match f.as_str() {
            "html" => Format::Html,
            "pdf" => Format::Pdf,
            other => {
                return Err(usage(format!(
                    "shard.json names an unknown format `{other}`"
                )));
            }
        });
    }
    let (out_dir, out_named_by) = match &args.out {
        Some(o) => (o.clone(), "--out"),
        None => (program.root.join(&program.def.report.out), "report.out"),
    };
    let key = run_key(&program, &modules, period, as_of, &formats)?;
    let state_dir =
        group::ledger::resolve_dir(args.state.as_deref(), &program, &out_dir).map_err(usage)?;
    Ok(RunPlan {
        program,
        modules,
        period,
        as_of,
        out_dir,
        out_named_by,
        formats,
        only,
        jobs: 1,
        incremental: false,
        shard: None,
        access: shard::access(args.group_readable),
        key,
        state_dir,
    })
}

fn format_name(f: &Format) -> String {
    format!("{f:?}").to_lowercase()
}

/// The run key: hashes of `program.yaml` and the template folder, the modules' settings,
/// period, as-of date, formats and tool version.
pub fn run_key(
    program: &Program,
    modules: &ModuleSet,
    period: Period,
    as_of: NaiveDate,
    formats: &[Format],
) -> Result<RunKey, PlanError> {
    let read = |p: &Path| {
        crate::limits::read_input(p).map_err(|e| {
            (
                exit_code::PROGRAM_INVALID,
                vec![Diagnostic::error(
                    p.display().to_string(),
                    format!("cannot read ({e})"),
                )],
            )
        })
    };
    let program_yaml = blake3::hash(&read(&program.root.join(program::load::PROGRAM_FILE))?)
        .to_hex()
        .to_string();
    let templates = match &program.def.report.templates {
        None => "built-in".to_string(),
        Some(t) => {
            let dir = program.root.join(t);
            let mut h = blake3::Hasher::new();
            for entry in walkdir::WalkDir::new(&dir).sort_by_file_name() {
                let Ok(entry) = entry else { continue };
                if entry.file_type().is_file() {
                    let rel = entry.path().strip_prefix(&dir).unwrap_or(entry.path());
                    h.update(rel.to_string_lossy().as_bytes());
                    h.update(&[0]);
                    h.update(blake3::hash(&read(entry.path())?).as_bytes());
                }
            }
            h.finalize().to_hex().to_string()
        }
    };
    Ok(RunKey {
        tool: format!("cohortpress {}", env!("CARGO_PKG_VERSION")),
        program_yaml,
        templates,
        modules: modules.settings_fingerprint(),
        period_from: period.from.to_string(),
        period_to: period.to.to_string(),
        as_of: as_of.to_string(),
        formats: formats.iter().map(format_name).collect(),
    })
}

/// The reporting period: `--period YYYY-MM`, `--from/--to`, or program.yaml's rule, clipped to
/// the program's dates.
pub fn resolve_period(
    program: &Program,
    as_of: NaiveDate,
    args: &RunArgs,
) -> Result<Period, String> {
    let (start, end) = (program.info.start, program.info.end);
    let raw = if let Some(p) = &args.period {
        month_period(p)
            .ok_or_else(|| format!("--period: expected a month like 2026-09, found `{p}`"))?
    } else if let (Some(from), Some(to)) = (args.from, args.to) {
        if from > to {
            return Err(format!("--from {from} is after --to {to}"));
        }
        Period { from, to }
    } else {
        match program.def.report.period {
            DefaultPeriod::ProgramToDate => Period {
                from: start,
                to: as_of.min(end),
            },
            DefaultPeriod::LastFullMonth => {
                let first_of_this = as_of.with_day(1).expect("day 1 exists");
                let last_month_end = first_of_this.pred_opt().expect("date in range");
                let candidate = last_month_end.with_day(1).expect("day 1 exists");
                if candidate > end {
                    // The program is over: report its last month.
                    let m = end.with_day(1).expect("day 1 exists");
                    Period { from: m, to: end }
                } else {
                    Period {
                        from: candidate,
                        to: last_month_end,
                    }
                }
            }
        }
    };
    let from = raw.from.max(start);
    let to = raw.to.min(end);
    if from > to {
        return Err(format!(
            "the period {} to {} lies outside the program ({start} to {end})",
            raw.from, raw.to
        ));
    }
    if from > as_of {
        return Err(format!(
            "the period starts {from}, after the as-of date {as_of}"
        ));
    }
    Ok(Period { from, to })
}

fn month_period(s: &str) -> Option<Period> {
    let (y, m) = s.split_once('-')?;
    let from = NaiveDate::from_ymd_opt(y.parse().ok()?, m.parse().ok()?, 1)?;
    let next = if from.month() == 12 {
        NaiveDate::from_ymd_opt(from.year() + 1, 1, 1)?
    } else {
        NaiveDate::from_ymd_opt(from.year(), from.month() + 1, 1)?
    };
    Some(Period {
        from,
        to: next.pred_opt()?,
    })
}

/// Totals of a finished run, and its exit code.
#[derive(Debug, Default, Clone, serde::Serialize)]
pub struct RunSummary {
    /// Participant folders found (after `--only`).
    pub participants: usize,
    /// Participants with a report.
    pub reported: usize,
    /// Participants left out because of input errors.
    pub participants_with_errors: usize,
    /// Module failures (participant × module).
    pub module_failures: usize,
    /// Input warnings.
    pub warnings: usize,
    /// Warnings about the participants folder (stray files, links).
    pub program_warnings: usize,
    /// Participant folders skipped because their name is not a usable id.
    pub skipped_folders: usize,
}

impl RunSummary {
    /// The documented exit code for this outcome (see [`exit_code::Outcome`]).
    pub fn exit_code(&self) -> i32 {
        exit_code::Outcome {
            program_invalid: false,
            participants_left_out: self.participants_with_errors + self.skipped_folders,
            module_failures: self.module_failures,
            warnings: self.warnings + self.program_warnings,
        }
        .exit_code()
    }
}

/// A run that could not complete.
#[derive(Debug, thiserror::Error)]
pub enum RunError {
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
        /// The exit code (usage or program invalid).
        code: i32,
    },
}

impl RunError {
    /// The documented exit code.
    pub fn exit_code(&self) -> i32 {
        match self {
            RunError::Locked(_) => exit_code::LOCKED,
            RunError::Output(_) | RunError::Render(_) => exit_code::OUTPUT_FAILED,
            RunError::Refused { code, .. } => *code,
        }
    }
}

impl From<StagingError> for RunError {
    fn from(e: StagingError) -> Self {
        match e {
            StagingError::Locked(m) => RunError::Locked(m),
            StagingError::Refused(m) => RunError::Refused {
                message: m,
                code: exit_code::USAGE,
            },
            other => RunError::Output(other.to_string()),
        }
    }
}

/// The participant folders a plan covers: discovery, then `--only`, then `--shard`. Refused
/// (nothing is written) when there is nothing sound to report on: `participants/` missing or
/// unreadable (exit 3, as `check`), or an `--only` id without a folder (exit 2): a typo must
/// never produce an empty report.
pub fn select_participants(
    plan: &RunPlan,
) -> Result<(Vec<ParticipantDir>, Vec<Diagnostic>), RunError> {
    let (mut dirs, discovery) = participant::discover(&plan.program);
    if let Some(d) = discovery.iter().find(|d| participant::is_folder_error(d)) {
        return Err(RunError::Refused {
            message: format!(
                "{}; the previous output was left as it is",
                d.to_string()
                    .trim_start_matches("error: ")
                    .replace('\n', " |")
            ),
            code: exit_code::PROGRAM_INVALID,
        });
    }
    if !plan.only.is_empty() {
        let unknown: Vec<&str> = plan
            .only
            .iter()
            .filter(|id| !dirs.iter().any(|d| &d.id == *id))
            .map(String::as_str)
            .collect();
        if !unknown.is_empty() {
            return Err(RunError::Refused {
                message: format!(
                    "--only: no participant folder named {} in {}; nothing was written",
                    unknown.join(", "),
                    plan.program
                        .root
                        .join(participant::PARTICIPANTS_DIR)
                        .display()
                ),
                code: exit_code::USAGE,
            });
        }
        dirs.retain(|d| plan.only.contains(&d.id));
    }
    if let Some(s) = plan.shard {
        dirs.retain(|d| s.contains(&d.id));
    }
    Ok((dirs, discovery))
}

/// Executes a plan: every participant, then (unless it is a shard) the group step and all
/// outputs.
pub fn execute(plan: &RunPlan) -> Result<(RunSummary, Timing), RunError> {
    let (dirs, discovery) = select_participants(plan)?;
    let templates = report::templates::TemplateSet::load(&plan.program)
        .map_err(|e| RunError::Render(e.to_string()))?;
    let staging = plan.begin_staging()?;
    tracing::info!(
        "program {}: {} participants{}, period {} to {}, as of {}",
        plan.program.info.id,
        dirs.len(),
        plan.shard
            .map(|s| format!(" in shard {s}"))
            .unwrap_or_default(),
        plan.period.from,
        plan.period.to,
        plan.as_of
    );

    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(plan.jobs)
        .build()
        .map_err(|e| RunError::Output(format!("cannot start worker threads: {e}")))?;
    let key_hash = plan.key.hash();
    let phase = Instant::now();
    let progress = crate::progress::Progress::new(dirs.len() as u64);
    let columns = Mutex::new(tidy::Columns::new(plan.modules.ids()));
    let results: Vec<Result<(ParticipantRecord, bool), RunError>> = pool.install(|| {
        dirs.par_iter()
            .map(|dir| {
                let reused = if plan.incremental {
                    reuse_participant(plan, &key_hash, &staging, dir)?
                } else {
                    None
                };
                let (mut rec, was_reused) = match reused {
                    Some(rec) => (rec, true),
                    None => (
                        process_participant(plan, &key_hash, &templates, &staging, dir)?,
                        false,
                    ),
                };
                keep_light(&mut rec, &columns);
                let r = (rec, was_reused);
                progress.tick();
                Ok(r)
            })
            .collect()
    });
    progress.finish();
    let mut records = Vec::with_capacity(results.len());
    let mut reused = 0usize;
    for r in results {
        let (rec, was_reused) = r?;
        reused += usize::from(was_reused);
        records.push(rec);
    }
    let participants_s = phase.elapsed().as_secs_f64();
    if plan.incremental {
        tracing::info!(
            "incremental: {} participants reused, {} recomputed",
            reused,
            records.len() - reused
        );
    }

    if let Some(s) = plan.shard {
        let (summary, _, _, _) = tally(&discovery, &records);
        let file = ShardFile {
            format: shard::FORMAT,
            shard: s.index,
            of: s.count,
            program_id: plan.program.info.id.clone(),
            key: plan.key.clone(),
            only: plan.only.clone(),
            discovery: discovery.iter().map(DiagRecord::from_diagnostic).collect(),
            participants: records.iter().map(|r| r.id.clone()).collect(),
        };
        let phase = Instant::now();
        staging.write(shard::SHARD_FILE, &file.to_bytes())?;
        staging.commit()?;
        let timing = Timing {
            participants_s,
            commit_s: phase.elapsed().as_secs_f64(),
            ..Default::default()
        };
        return Ok((summary, timing));
    }
    let columns = columns
        .into_inner()
        .expect("no panics while holding the lock");
    let (summary, mut timing) = finish(plan, &templates, staging, &discovery, &records, &columns)?;
    timing.participants_s = participants_s;
    Ok((summary, timing))
}

/// What a record keeps in memory until the end of the run: everything but its tidy metrics,
/// which stay in its `cache/ID.json` (already written) and are streamed into the tidy files by
/// [`tidy::render`]; only their column names are noted. Memory then grows with the small
/// summary rows, not with the metrics.
pub fn keep_light(rec: &mut ParticipantRecord, columns: &Mutex<tidy::Columns>) {
    // The folder listing and report hashes served incremental reuse and merge checks, which
    // are done by now; staging keeps its own list of written files for the manifest.
    rec.listing = Vec::new();
    rec.reports = Vec::new();
    if let Some(t) = rec.tidy.take() {
        // Converted (moved) before the lock is taken, so workers do not queue behind it.
        let t = t.into_tidy();
        columns
            .lock()
            .expect("no panics while holding the lock")
            .observe(&t);
    }
}

/// Totals, every diagnostic, the group step's rows and the input files of a set of participant
/// records (in id order).
fn tally(
    discovery: &[Diagnostic],
    records: &[ParticipantRecord],
) -> (
    RunSummary,
    Vec<Diagnostic>,
    Vec<ParticipantSummary>,
    Vec<InputFile>,
) {
    let mut summary = RunSummary {
        participants: records.len(),
        program_warnings: discovery
            .iter()
            .filter(|d| d.severity == Severity::Warning)
            .count(),
        skipped_folders: discovery
            .iter()
            .filter(|d| d.severity == Severity::Error)
            .count(),
        ..Default::default()
    };
    let mut all_diags: Vec<Diagnostic> = discovery.to_vec();
    let mut rows = Vec::new();
    let mut inputs: Vec<InputFile> = Vec::new();
    for r in records {
        let diags = r.diagnostics();
        if diags.iter().any(|d| d.severity == Severity::Error) {
            summary.participants_with_errors += 1;
        }
        summary.warnings += diags
            .iter()
            .filter(|d| d.severity == Severity::Warning)
            .count();
        summary.module_failures += r.failures.len();
        for (m, msg) in &r.failures {
            tracing::warn!("{}: module {m} failed: {msg}", r.id);
        }
        all_diags.extend(diags);
        inputs.extend(r.input_files());
        // A usable participant has a summary row (and a report and tidy metrics).
        if let Some(s) = &r.summary {
            summary.reported += 1;
            let mut row = s.to_summary();
            // Group-report ledger hook: a stable stand-in for the id (never shown).
            row.pseudonym = Some(group::pseudonym(&r.id));
            rows.push(row);
        }
    }
    let reported: std::collections::BTreeSet<&str> = records
        .iter()
        .filter(|r| r.summary.is_some())
        .map(|r| r.id.as_str())
        .collect();
    for d in &all_diags {
        match d.severity {
            // An error in the profile leaves its participant out; an error in another file
            // leaves that file out (the participant is reported without it).
            Severity::Error => {
                let left_out = d
                    .participant
                    .as_deref()
                    .is_none_or(|p| !reported.contains(p));
                let what = if left_out {
                    "participant left out: "
                } else {
                    "file not used: "
                };
                tracing::warn!(
                    "{}",
                    d.to_string()
                        .replacen("error: ", what, 1)
                        .replace('\n', " |")
                )
            }
            Severity::Warning => tracing::debug!("{}", d.to_string().replace('\n', " |")),
        }
    }
    inputs.sort_by(|a, b| a.path.cmp(&b.path));
    (summary, all_diags, rows, inputs)
}

/// The group step, group reports, tidy metrics and manifest from every participant's record
/// (sorted by id), then the swap into place. Shared by `run` and `merge`, which is why a
/// merged output equals a single run's.
pub fn finish(
    plan: &RunPlan,
    templates: &report::templates::TemplateSet,
    staging: Staging,
    discovery: &[Diagnostic],
    records: &[ParticipantRecord],
    columns: &tidy::Columns,
) -> Result<(RunSummary, Timing), RunError> {
    let mut timing = Timing::default();
    let (summary, all_diags, rows, inputs) = tally(discovery, records);

    // Group step and group reports.
    let phase = Instant::now();
    let opts = GroupOptions {
        min_cell_size: plan.program.def.privacy.min_cell_size,
        group_by: plan.program.def.report.group_by.clone(),
        confidence: 0.95,
    };
    // Group-report ledger hook: audit against what earlier reports published, record after
    // the outputs are in place.
    let mut ledger = group::ledger::Ledger::open(&plan.state_dir)
        .map_err(|e| RunError::Output(format!("group-report ledger: {e}")))?;
    let program_id = plan.program.info.id.clone();
    let (period_from, period_to) = (plan.period.from.to_string(), plan.period.to.to_string());
    let (mut group, published) =
        group::summarize_release(&rows, &opts, &ledger.history(&program_id));
    let headline = report::group::headline(&group, &format!("{period_from} to {period_to}"));
    group.releases = ledger.earlier_headlines(&program_id, &period_to);
    group.releases.push(headline.clone());
    let group_ctx = report::group_context(plan, &group, &summary);
    let group_files = report::render_group(templates, &group_ctx, &plan.formats)
        .map_err(|e| RunError::Render(e.to_string()))?;
    for (name, bytes) in group_files {
        staging.write(&format!("group/{name}"), &bytes)?;
    }
    timing.group_s = phase.elapsed().as_secs_f64();

    // ---- Clinician follow-up list (only when `followup.recipient` is set) ----
    // Identified: its own folder, owner-only whatever `--group-readable` says, and built from
    // the records alone, never from (or into) the group step.
    if plan.program.def.followup.is_some() {
        let list: Vec<_> = records.iter().filter_map(|r| r.followup.clone()).collect();
        let files = report::followup::render(plan, templates, &list, &plan.formats)
            .map_err(|e| RunError::Render(e.to_string()))?;
        for (name, bytes) in files {
            staging.write_private(&format!("{}/{name}", report::followup::FOLDER), &bytes)?;
        }
    }
    // ---- end of the follow-up hook ----

    // Tidy metrics.
    let phase = Instant::now();
    let ids: Vec<String> = records.iter().map(|r| r.id.clone()).collect();
    tidy::render(plan, columns, &ids, &staging, &all_diags, &group)
        .map_err(|e| RunError::Output(e.to_string()))?;
    timing.tidy_s = phase.elapsed().as_secs_f64();

    // Manifest last: it lists every other output.
    let phase = Instant::now();
    let manifest = crate::output::manifest(plan, &inputs, &staging, &summary)
        .map_err(|e| RunError::Output(e.to_string()))?;
    staging.write("manifest.json", &manifest)?;
    let outputs: OutputSet = staging.commit()?;
    ledger
        .record(group::ledger::release_record(
            &program_id,
            &period_from,
            &period_to,
            &plan.as_of.to_string(),
            headline,
            published,
        ))
        .map_err(|e| RunError::Output(format!("group-report ledger: {e}")))?;
    timing.commit_s = phase.elapsed().as_secs_f64();
    tracing::debug!("{} output files", outputs.files);
    Ok((summary, timing))
}

/// Names of every entry of a participant folder, sorted.
fn listing(dir: &ParticipantDir) -> Vec<String> {
    let mut names: Vec<String> = std::fs::read_dir(&dir.path)
        .map(|rd| {
            rd.filter_map(|e| e.ok())
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .collect()
        })
        .unwrap_or_default();
    names.sort();
    names
}

/// `--incremental`: the participant's previous record and reports, copied into staging, when
/// nothing they depend on changed: the run key, the folder listing and every input file's
/// hash, and the previous report files are intact. `None` means recompute.
fn reuse_participant(
    plan: &RunPlan,
    key_hash: &str,
    staging: &Staging,
    dir: &ParticipantDir,
) -> Result<Option<ParticipantRecord>, RunError> {
    let prev = staging.final_dir();
    let rel = partial::cache_path(&dir.id);
    // The previous output is read like an input: no links, no FIFOs or devices (which would
    // make the run wait or read forever), regular files within the size limit only.
    let Ok(bytes) = crate::limits::read_input(&prev.join(&rel)) else {
        return Ok(None);
    };
    let Some(rec) = ParticipantRecord::from_bytes(&bytes) else {
        return Ok(None);
    };
    if rec.id != dir.id || rec.run_key != key_hash || rec.listing != listing(dir) {
        return Ok(None);
    }
    for f in &rec.files {
        match crate::limits::read_input(&plan.program.root.join(&f.path)) {
            Ok(b) if blake3::hash(&b).to_hex().as_str() == f.blake3 => {}
            _ => return Ok(None),
        }
    }
    let mut reports = Vec::with_capacity(rec.reports.len());
    for r in &rec.reports {
        match crate::limits::read_input(&prev.join(&r.path)) {
            Ok(b) if blake3::hash(&b).to_hex().as_str() == r.blake3 => reports.push(b),
            _ => return Ok(None),
        }
    }
    for (r, b) in rec.reports.iter().zip(&reports) {
        staging.write(&r.path, b)?;
    }
    staging.write(&rel, &bytes)?;
    Ok(Some(rec))
}

/// Load → modules → participant report → written into staging, with the participant's
/// record (also written, as `cache/ID.json`). A participant's own problems never fail the run:
/// only an output write or template failure does.
fn process_participant(
    plan: &RunPlan,
    key_hash: &str,
    templates: &report::templates::TemplateSet,
    staging: &Staging,
    dir: &ParticipantDir,
) -> Result<ParticipantRecord, RunError> {
    let names = listing(dir);
    let loaded = participant::load_participant(&plan.program, dir, plan.as_of);
    let mut rec = ParticipantRecord {
        format: partial::FORMAT,
        id: loaded.id.clone(),
        run_key: key_hash.to_string(),
        listing: names,
        files: loaded.files.iter().map(InputRecord::from_input).collect(),
        diagnostics: loaded
            .diagnostics
            .iter()
            .map(DiagRecord::from_diagnostic)
            .collect(),
        failures: Vec::new(),
        reports: Vec::new(),
        summary: None,
        tidy: None,
        followup: None,
    };
    if let Some(data) = loaded.data {
        let results: ModuleResults =
            plan.modules
                .run(&plan.program.info, plan.period, plan.as_of, &data);
        rec.failures = results
            .failures
            .iter()
            .map(|f| (f.module.clone(), f.message.clone()))
            .collect();
        let ctx = report::participant_context(plan, &data, &results, &loaded.diagnostics);
        let files = report::render_participant(templates, &ctx, &plan.formats)
            .map_err(|e| RunError::Render(format!("participant {}: {e}", data.profile.id)))?;
        // Each report is written and dropped at once: no report bytes outlive this loop.
        for (ext, bytes) in files {
            let written =
                staging.write(&format!("participants/{}.{ext}", data.profile.id), &bytes)?;
            rec.reports.push(written);
        }
        rec.reports.sort();
        rec.summary = Some(SummaryRecord::from_summary(&summary_row(
            plan, &data, &results,
        )));
        rec.tidy = Some(TidyRecord::from_tidy(tidy::participant(
            plan, &data, &results,
        )));
        // Clinician follow-up list: this participant's flags, when the program turns it on.
        rec.followup = report::followup::for_participant(plan, &data, &results);
    }
    staging.write(&partial::cache_path(&rec.id), &rec.to_bytes())?;
    Ok(rec)
}

/// The de-identified summary row of one participant for the group step.
pub fn summary_row(
    plan: &RunPlan,
    data: &ParticipantData,
    results: &ModuleResults,
) -> ParticipantSummary {
    let get = |m: &str| results.output(m);
    let trend = get("trend");
    let adherence = get("adherence");
    let outcomes = get("outcomes");
    let period = plan.period;
    let withdrawn = data.profile.withdrew.is_some_and(|w| w <= period.to);
    let baseline_kg = outcomes
        .and_then(|o| o.scalar("baseline_weight_kg"))
        .or_else(|| data.baseline_weight().map(|w| w.weight.kg()));
    let trend_series = trend.and_then(|t| t.series("weight_trend"));
    // Outcome weight: the current trend weight (the smoothed level on the last weigh-in day
    // of the period), if that weigh-in lies in the last 28 days of the period; otherwise the
    // outcome is missing (rule documented in the README).
    let last_weigh_in = data
        .weights
        .iter()
        .rev()
        .find(|w| w.date <= period.to)
        .map(|w| w.date);
    let current = trend.and_then(|t| t.scalar("current_weight_kg"));
    let recent = last_weigh_in.is_some_and(|d| (period.to - d).num_days() < 28);
    let outcome_kg = if recent { current } else { None };
    let last_observed_kg = current.or_else(|| {
        data.weights
            .iter()
            .rev()
            .find(|w| w.date <= period.to)
            .map(|w| w.weight.kg())
    });
    let weekly_change_percent = match (trend_series, baseline_kg) {
        (Some(s), Some(b)) if b > 0.0 => s
            .points
            .iter()
            .filter(|p| p.date >= data.profile.enrolled && p.date <= period.to)
            .filter_map(|p| {
                let days = (p.date - data.profile.enrolled).num_days();
                (days % 7 == 6).then(|| ((days / 7) as u32, 100.0 * (p.value - b) / b))
            })
            .collect(),
        _ => Vec::new(),
    };
    let in_plateau = trend.and_then(|t| t.text("status")).and_then(|s| match s {
        "plateau" => Some(true),
        "insufficient_data" | "unclear" => None,
        _ => Some(false),
    });
    let clinical_flags = results
        .outputs
        .iter()
        .flat_map(|(_, o)| o.flags.iter())
        .filter(|f| f.severity == cohortpress_metric_api::FlagSeverity::Clinical)
        .count() as u32;
    ParticipantSummary {
        groups: data.profile.groups.clone(),
        enrolled: true,
        withdrawn,
        started: baseline_kg.is_some(),
        baseline_kg,
        outcome_kg,
        last_observed_kg,
        weekly_change_percent,
        activity_minutes_per_week: adherence.and_then(|a| a.scalar("activity_minutes_per_week")),
        weigh_ins_per_week: adherence.and_then(|a| a.scalar("weigh_ins_per_week")),
        food_log_days_per_week: adherence.and_then(|a| a.scalar("food_log_days_per_week")),
        attendance_percent: adherence.and_then(|a| a.scalar("attendance_to_date_percent")),
        in_plateau,
        clinical_flags,
        pseudonym: None,
    }
}

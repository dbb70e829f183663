//! The orchestrator: resolves a run plan, processes participants in parallel, aggregates the
//! group step, renders reports, and is the only code that writes output files.
//!
//! Outputs are written into a staging folder beside the output folder and moved into place only
//! when complete, so a run killed at any moment leaves the previous complete output intact (see
//! [`crate::output`]).

use crate::cli::{FormatArg, RunArgs};
use crate::diag::{Diagnostic, Severity};
use crate::exit_code;
use crate::group::{self, GroupOptions, ParticipantSummary};
use crate::modules::{self, ModuleResults, ModuleSet};
use crate::output::{OutputSet, Staging};
use crate::participant::{self, InputFile, ParticipantDir};
use crate::program::{self, DefaultPeriod, Format, Program};
use crate::report;
use crate::tidy::{self, TidyParticipant};
use chrono::{Datelike, NaiveDate};
use cohortpress_metric_api::{ParticipantData, Period};
use rayon::prelude::*;
use std::path::{Path, PathBuf};
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
    /// Formats to write.
    pub formats: Vec<Format>,
    /// Only these participant ids (empty = all).
    pub only: Vec<String>,
    /// Worker threads.
    pub jobs: usize,
}

/// What happened to one participant.
pub struct ParticipantOutcome {
    /// Participant id (folder name).
    pub id: String,
    /// Loader diagnostics.
    pub diagnostics: Vec<Diagnostic>,
    /// Module failures, as (module, message).
    pub failures: Vec<(String, String)>,
    /// Files read.
    pub files: Vec<InputFile>,
    /// The de-identified summary for the group step (`None` when the participant was unusable).
    pub summary: Option<ParticipantSummary>,
    /// Tidy metrics row and weekly series (`None` when unusable).
    pub tidy: Option<TidyParticipant>,
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
    match execute(&plan) {
        Ok(summary) => {
            tracing::info!(
                "done in {:.1} s: {} participants reported, {} with errors, {} module failures, {} warnings; outputs in {}",
                started.elapsed().as_secs_f64(),
                summary.reported,
                summary.participants_with_errors,
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

/// Resolves the plan: loads and checks the program and its modules, the period and the output
/// folder.
pub fn plan_from_args(args: &RunArgs, today: NaiveDate) -> Result<RunPlan, PlanError> {
    let program =
        program::load_program(&args.program).map_err(|d| (exit_code::PROGRAM_INVALID, d))?;
    let (modules, warnings) =
        modules::build_module_set(&program).map_err(|d| (exit_code::PROGRAM_INVALID, d))?;
    for w in &warnings {
        tracing::warn!("{w}");
    }
    let as_of = args.as_of.unwrap_or(today);
    let period = resolve_period(&program, as_of, args).map_err(usage)?;
    let out_dir = match &args.out {
        Some(o) => o.clone(),
        None => program.root.join(&program.def.report.out),
    };
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
    Ok(RunPlan {
        program,
        modules,
        period,
        as_of,
        out_dir,
        formats,
        only: args.only.clone(),
        jobs,
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
    /// Program-level diagnostics (discovery).
    pub program_warnings: usize,
}

impl RunSummary {
    /// The documented exit code for this outcome (highest applicable).
    pub fn exit_code(&self) -> i32 {
        if self.module_failures > 0 {
            exit_code::MODULE_FAILED
        } else if self.participants_with_errors > 0 {
            exit_code::PARTICIPANT_ERRORS
        } else if self.warnings > 0 || self.program_warnings > 0 {
            exit_code::WARNINGS
        } else {
            exit_code::SUCCESS
        }
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
}

impl RunError {
    /// The documented exit code.
    pub fn exit_code(&self) -> i32 {
        match self {
            RunError::Locked(_) => exit_code::LOCKED,
            RunError::Output(_) | RunError::Render(_) => exit_code::OUTPUT_FAILED,
        }
    }
}

/// Executes a plan: every participant, the group step, all outputs.
pub fn execute(plan: &RunPlan) -> Result<RunSummary, RunError> {
    let staging = Staging::begin(&plan.out_dir).map_err(|e| match e {
        crate::output::StagingError::Locked(m) => RunError::Locked(m),
        other => RunError::Output(other.to_string()),
    })?;
    let templates = report::templates::TemplateSet::load(&plan.program)
        .map_err(|e| RunError::Render(e.to_string()))?;

    let (mut dirs, discovery) = participant::discover(&plan.program);
    if !plan.only.is_empty() {
        let unknown: Vec<&String> = plan
            .only
            .iter()
            .filter(|id| !dirs.iter().any(|d| &d.id == *id))
            .collect();
        for id in unknown {
            tracing::warn!("--only {id}: no such participant folder");
        }
        dirs.retain(|d| plan.only.contains(&d.id));
    }
    tracing::info!(
        "program {}: {} participants, period {} to {}, as of {}",
        plan.program.info.id,
        dirs.len(),
        plan.period.from,
        plan.period.to,
        plan.as_of
    );

    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(plan.jobs)
        .build()
        .map_err(|e| RunError::Output(format!("cannot start worker threads: {e}")))?;
    let progress = crate::progress::Progress::new(dirs.len() as u64);
    let results: Vec<Result<ParticipantOutcome, RunError>> = pool.install(|| {
        dirs.par_iter()
            .map(|dir| {
                let r = process_participant(plan, &templates, &staging, dir);
                progress.tick();
                r
            })
            .collect()
    });
    progress.finish();

    let mut outcomes = Vec::with_capacity(results.len());
    for r in results {
        outcomes.push(r?);
    }

    let mut summary = RunSummary {
        participants: dirs.len(),
        ..Default::default()
    };
    summary.program_warnings = discovery.len();
    let mut all_diags: Vec<Diagnostic> = discovery.clone();
    let mut rows = Vec::new();
    let mut tidy_rows = Vec::new();
    let mut inputs: Vec<InputFile> = Vec::new();
    for o in &outcomes {
        let errors = o
            .diagnostics
            .iter()
            .filter(|d| d.severity == Severity::Error)
            .count();
        if errors > 0 {
            summary.participants_with_errors += 1;
        }
        summary.warnings += o
            .diagnostics
            .iter()
            .filter(|d| d.severity == Severity::Warning)
            .count();
        summary.module_failures += o.failures.len();
        for (m, msg) in &o.failures {
            tracing::warn!("{}: module {m} failed: {msg}", o.id);
        }
        all_diags.extend(o.diagnostics.iter().cloned());
        inputs.extend(o.files.iter().cloned());
        if let Some(s) = &o.summary {
            rows.push(s.clone());
        }
        if let Some(t) = &o.tidy {
            summary.reported += 1;
            tidy_rows.push(t);
        }
    }
    for d in &all_diags {
        match d.severity {
            Severity::Error => tracing::warn!("{}", d.to_string().replace('\n', " |")),
            Severity::Warning => tracing::debug!("{}", d.to_string().replace('\n', " |")),
        }
    }

    // Group step and group reports.
    let opts = GroupOptions {
        min_cell_size: plan.program.def.privacy.min_cell_size,
        group_by: plan.program.def.report.group_by.clone(),
        confidence: 0.95,
    };
    let group = group::summarize(&rows, &opts);
    let group_ctx = report::group_context(plan, &group, &summary);
    let group_files = report::render_group(&templates, &group_ctx, &plan.formats)
        .map_err(|e| RunError::Render(e.to_string()))?;
    for (name, bytes) in group_files {
        staging
            .write(&format!("group/{name}"), &bytes)
            .map_err(|e| RunError::Output(e.to_string()))?;
    }

    // Tidy metrics.
    let tidy_files = tidy::render(plan, &tidy_rows, &all_diags, &group)
        .map_err(|e| RunError::Output(e.to_string()))?;
    for (name, bytes) in tidy_files {
        staging
            .write(&name, &bytes)
            .map_err(|e| RunError::Output(e.to_string()))?;
    }

    // Manifest last: it lists every other output.
    inputs.sort_by(|a, b| a.path.cmp(&b.path));
    let manifest = crate::output::manifest(plan, &inputs, &staging, &summary)
        .map_err(|e| RunError::Output(e.to_string()))?;
    staging
        .write("manifest.json", &manifest)
        .map_err(|e| RunError::Output(e.to_string()))?;
    let outputs: OutputSet = staging
        .commit()
        .map_err(|e| RunError::Output(e.to_string()))?;
    tracing::debug!("{} output files", outputs.files);
    Ok(summary)
}

/// Load → modules → participant report → written into staging; returns what the group step and
/// the tidy files need. A participant's own problems never fail the run: only an output write
/// or template failure does.
fn process_participant(
    plan: &RunPlan,
    templates: &report::templates::TemplateSet,
    staging: &Staging,
    dir: &ParticipantDir,
) -> Result<ParticipantOutcome, RunError> {
    let loaded = participant::load_participant(&plan.program, dir, plan.as_of);
    let mut outcome = ParticipantOutcome {
        id: loaded.id.clone(),
        diagnostics: loaded.diagnostics,
        failures: Vec::new(),
        files: loaded.files,
        summary: None,
        tidy: None,
    };
    let Some(data) = loaded.data else {
        return Ok(outcome);
    };
    let results: ModuleResults =
        plan.modules
            .run(&plan.program.info, plan.period, plan.as_of, &data);
    outcome.failures = results
        .failures
        .iter()
        .map(|f| (f.module.clone(), f.message.clone()))
        .collect();
    let ctx = report::participant_context(plan, &data, &results, &outcome.diagnostics);
    let files = report::render_participant(templates, &ctx, &plan.formats)
        .map_err(|e| RunError::Render(format!("participant {}: {e}", data.profile.id)))?;
    for (ext, bytes) in files {
        staging
            .write(&format!("participants/{}.{ext}", data.profile.id), &bytes)
            .map_err(|e| RunError::Output(e.to_string()))?;
    }
    outcome.summary = Some(summary_row(plan, &data, &results));
    outcome.tidy = Some(tidy::participant(plan, &data, &results));
    Ok(outcome)
}

/// The de-identified summary row of one participant for the group step.
pub fn summary_row(
    plan: &RunPlan,
    data: &ParticipantData,
    results: &ModuleResults,
) -> ParticipantSummary {
    let get = |m: &str| {
        results
            .outputs
            .iter()
            .find(|(id, _)| id == m)
            .map(|(_, o)| o)
    };
    let trend = get("trend");
    let adherence = get("adherence");
    let outcomes = get("outcomes");
    let period = plan.period;
    let withdrawn = data.profile.withdrew.is_some_and(|w| w <= period.to);
    let baseline_kg = outcomes
        .and_then(|o| o.scalar("baseline_weight_kg"))
        .or_else(|| data.baseline_weight().map(|w| w.weight.kg()));
    let trend_series = trend.and_then(|t| t.series("weight_trend"));
    // Outcome weight: the trend weight at the period end, if there is a weigh-in in the last
    // 28 days of the period (otherwise the outcome is missing; rule documented in the README).
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
        "insufficient_data" => None,
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
        attendance_percent: adherence.and_then(|a| a.scalar("attendance_percent")),
        in_plateau,
        clinical_flags,
    }
}

//! The run plan: everything a run needs, resolved from plain options (the command line's, once
//! [`crate::cmd`] has converted them) and `program.yaml`.

use super::shard::{self, ShardSpec};
use super::{Blame, RunError};
use crate::diag::Diagnostic;
use crate::group;
use crate::modules::ModuleSet;
use crate::output::{Access, OutputScope, OutputTarget, Staging, StagingError};
use crate::program::{self, DefaultPeriod, Format, Program};
use crate::report::Scope;
use crate::run::partial::RunKey;
use chrono::{Datelike, NaiveDate};
use cohortpress_metric_api::Period;
use std::path::{Path, PathBuf};

/// How `run` was asked to run, free of any command-line library.
#[derive(Debug, Clone, Default)]
pub struct RunOptions {
    /// The program folder.
    pub program: PathBuf,
    /// Reporting month `YYYY-MM`.
    pub period: Option<String>,
    /// First day of a custom period (with `to`).
    pub from: Option<NaiveDate>,
    /// Last day of a custom period (with `from`).
    pub to: Option<NaiveDate>,
    /// The day treated as today (default: the caller's today).
    pub as_of: Option<NaiveDate>,
    /// Output folder (default: `report.out`).
    pub out: Option<PathBuf>,
    /// Only these participant ids.
    pub only: Vec<String>,
    /// Worker threads (default: number of cores).
    pub jobs: Option<usize>,
    /// Formats (default: `report.formats`).
    pub formats: Vec<Format>,
    /// Reuse unchanged participants' previous results.
    pub incremental: bool,
    /// Process only this shard.
    pub shard: Option<ShardSpec>,
    /// Outputs readable by the owner's group.
    pub group_readable: bool,
    /// State folder of the group-report ledger.
    pub state: Option<PathBuf>,
    /// Start the audit again from nothing although earlier group reports are known
    /// ([`lost_ledger`]).
    pub new_ledger: bool,
}

/// How `merge` was asked to run.
#[derive(Debug, Clone, Default)]
pub struct MergeOptions {
    /// The program folder the shards were run on.
    pub program: PathBuf,
    /// The shards' output folders.
    pub shards: Vec<PathBuf>,
    /// Output folder (default: `report.out`).
    pub out: Option<PathBuf>,
    /// Outputs readable by the owner's group.
    pub group_readable: bool,
    /// State folder of the group-report ledger.
    pub state: Option<PathBuf>,
    /// Start the audit again from nothing although earlier group reports are known
    /// ([`lost_ledger`]).
    pub new_ledger: bool,
}

/// Everything a run needs, resolved from the command line and `program.yaml`.
pub struct RunPlan {
    /// The checked program.
    pub program: Program,
    /// Its modules, settings resolved.
    pub modules: ModuleSet,
    /// The reporting period.
    pub period: Period,
    /// Whether the command line named the period (`--period`, `--from`/`--to`) rather than
    /// program.yaml's `report.period` rule choosing it from the as-of date (a cron line's way).
    /// `merge` takes the shards' period and counts it as named by the rule.
    pub period_named: bool,
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
    /// State folder of the group-report ledger (`--state`; see [`crate::group::ledger::resolve_dir`]).
    pub state_dir: PathBuf,
    /// Where `state_dir` was found (named, an existing ledger, or the program's new one).
    pub state_source: group::ledger::StateSource,
    /// Why the run is refused (a usage error) once its ledger folder is found usable: the
    /// ledger does not record the program's earlier group reports and `--new-ledger` was not
    /// given ([`lost_ledger`]).
    pub lost_ledger: Option<String>,
}

impl RunPlan {
    /// The log's line for a run after the program's end (`None` before it): a monthly cron
    /// line left in place after the end reported the last period again, month after month, and
    /// nothing in the log said that the program was over. `None` too when the command line
    /// named the period: a month reported again by hand after the end (a November cron missed,
    /// run in May) was told that "no period after the end is ever reported" and to "remove the
    /// line that starts it", words for the cron line only.
    pub fn ended_note(&self) -> Option<String> {
        let end = self.program.info.end;
        (self.as_of > end && !self.period_named).then(|| {
            format!(
                "the program ended on {end} (program.yaml's `program.end`): this run reports \
                 {} to {} with the data as of {}; no period after the end is ever reported",
                self.period.from, self.period.to, self.as_of
            )
        })
    }

    /// What a run after the program's end produced, for the log's line before its last one
    /// (`None` before the end): `reported` participant reports, and the group report unless
    /// the run is a shard or `--only`.
    pub fn ended_summary(&self, reported: usize) -> Option<String> {
        let end = self.program.info.end;
        (self.as_of > end && !self.period_named).then(|| {
            let group = if self.shard.is_some() {
                "; this shard's partial results, to be merged, no group report"
            } else if !self.only.is_empty() {
                "; no group report (--only)"
            } else {
                " and the group report"
            };
            format!(
                "the program ended on {end}: this run wrote {reported} participant report{} for \
                 {} to {}{group}, as of {}; once no more data are expected, remove the line that \
                 starts it",
                if reported == 1 { "" } else { "s" },
                self.period.from,
                self.period.to,
                self.as_of
            )
        })
    }

    /// Which run this is, as `manifest.json` and `metrics/datapackage.json` both say it.
    pub fn run_info(&self) -> crate::tidy::RunInfo {
        crate::tidy::RunInfo {
            tool: format!("cohortpress {}", env!("CARGO_PKG_VERSION")),
            program_id: self.program.info.id.clone(),
            program_yaml_blake3: self.key.program_yaml.clone(),
            templates_blake3: self.key.templates.clone(),
            period_from: self.period.from.to_string(),
            period_to: self.period.to.to_string(),
            as_of: self.as_of.to_string(),
            modules: self
                .modules
                .settings_fingerprint()
                .lines()
                .map(str::to_string)
                .collect(),
        }
    }

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
        output_target(
            &self.program,
            self.out_dir.clone(),
            self.scope(),
            self.out_named_by,
        )
    }

    /// Takes the output folder for this run (see [`Staging::begin`]). A refusal names the
    /// folder and who named it: the command line or program.yaml.
    pub fn begin_staging(&self) -> Result<Staging, RunError> {
        Staging::begin(&self.output_target(), self.access).map_err(|e| self.staging_error(e))
    }

    /// Refuses an output folder a run could not write as [`RunPlan::begin_staging`] would
    /// refuse it (in its words and with its exit code), nothing created or locked: the path
    /// through a file, the program folder, a folder of other things. A run checks it before
    /// the group-report ledger's folder, as `check` does: a `report.out` under a file
    /// (`afile/reports`) was "group-report ledger: …/afile/reports.ledger: Not a directory (os
    /// error 20)", exit 6, as if the disk had failed, while `check` named the file (exit 3).
    /// Other errors (reading the folder) are left to the run's own start.
    pub fn check_output(&self) -> Result<(), RunError> {
        match self.output_target().check() {
            Err(e @ (StagingError::Refused(_) | StagingError::Partial(_))) => {
                Err(self.staging_error(e))
            }
            _ => Ok(()),
        }
    }

    /// A staging error as the run reports it: who named the folder decides the exit code.
    fn staging_error(&self, e: StagingError) -> RunError {
        match e {
            // `--only` into the program's own complete output: the command line is wrong (it
            // needs `--out DIR`), not program.yaml, so exit 2 and no program.yaml location.
            StagingError::Partial(m) => RunError::Refused {
                message: m,
                by: Blame::CommandLine,
            },
            StagingError::Refused(m) if self.out_named_by == "--out" => RunError::Refused {
                message: m,
                by: Blame::CommandLine,
            },
            // Named by program.yaml: say where (the file, line and column of `report.out`).
            StagingError::Refused(m) => RunError::Refused {
                message: match crate::program::load::key_position_in_file(
                    &self.program.root,
                    "report.out",
                ) {
                    Some((line, Some(col))) => format!("program.yaml:{line}:{col}: {m}"),
                    Some((line, None)) => format!("program.yaml:{line}: {m}"),
                    None => format!("program.yaml: {m}"),
                },
                by: Blame::Program,
            },
            other => other.into(),
        }
    }

    /// What the reports see of this run.
    pub fn report_scope(&self) -> Scope<'_> {
        Scope {
            program: &self.program,
            modules: &self.modules,
            period: self.period,
            as_of: self.as_of,
        }
    }
}

/// The output folder `dir` of `program` with what it must never touch: the program folder and
/// its templates.
pub fn output_target(
    program: &Program,
    dir: PathBuf,
    scope: OutputScope,
    named_by: &'static str,
) -> OutputTarget {
    OutputTarget {
        dir,
        program_root: program.root.clone(),
        participants_dir: crate::participant::PARTICIPANTS_DIR,
        program_id: program.info.id.clone(),
        templates: program
            .def
            .report
            .templates
            .as_ref()
            .map(|t| program.root.join(t)),
        scope,
        named_by,
    }
}

type PlanError = RunError;

/// Refuses `--out` or `--state` written with a `~` the shell did not expand (quoted, as in a
/// cron line `--out "~/reports"`): it would name a folder called `~` in the working folder.
fn no_tilde(option: &str, path: Option<&Path>) -> Result<(), PlanError> {
    match tilde_message(option, path) {
        Some(m) => Err(usage(m)),
        None => Ok(()),
    }
}

/// What [`no_tilde`] says about `option`'s `path` (`check --state` says the same).
pub(crate) fn tilde_message(option: &str, path: Option<&Path>) -> Option<String> {
    let path = path?;
    program::load::tilde_problem(path).map(|why| {
        format!(
            "{option} {}: {why}; write the full path (a shell expands `~` only when it is not \
             quoted)",
            path.display()
        )
    })
}

fn usage(message: String) -> PlanError {
    RunError::Invalid {
        by: Blame::CommandLine,
        diagnostics: vec![Diagnostic::error("command line", message)],
    }
}

fn invalid(diagnostics: Vec<Diagnostic>) -> PlanError {
    RunError::Invalid {
        by: Blame::Program,
        diagnostics,
    }
}

/// Loads and checks the program and its modules: the same function `check` uses
/// ([`crate::check::load_program_checked`]), so both refuse the same programs.
fn load_checked(root: &Path) -> Result<(Program, ModuleSet), PlanError> {
    use crate::check::LoadError;
    let (program, modules, warnings) =
        crate::check::load_program_checked(root).map_err(|e| match e {
            LoadError::Program(d) => invalid(d),
            LoadError::WorkFolder(_, d) => RunError::Invalid {
                by: Blame::Environment,
                diagnostics: vec![*d],
            },
        })?;
    for w in &warnings {
        tracing::warn!("{w}");
    }
    Ok((program, modules))
}

/// Why the group report of a run with ledger `state_dir` would start the audit across releases
/// again from nothing while this program's earlier group reports are known to exist, or `None`:
/// - the output folder holds a group report of this program (its manifest says so) for a
///   period the ledger does not record — the ledger was deleted, emptied, restored from an
///   older backup, or another one is named (`--state`, `report.state_dir`);
/// - the ledger records no release of this program while another does: the program's own
///   beside `report.out`, the output folder's, one beside it, `report.state_dir` when
///   `--state` is given, or a `*.ledger` folder in the program folder (`report.out` moved to
///   another parent folder made a new "own" ledger there, silently).
///
/// The ledger alone knows who each printed figure counted, so the tool cannot audit the new
/// report against a release it does not record; printed anyway, the new report subtracted
/// from the sponsor's copy of the earlier one gave a small group's figures (an 80-person demo
/// re-issued for September into the same `--out` after the ledger was deleted and one person
/// left printed "reached 3 % loss" 57 → 56 and "reached 5 %" 31 → 31, with no warning: that
/// person lost between 3 and 5 %). A first run (nothing of the program's anywhere) is not
/// concerned, and `--new-ledger` says the restart is meant.
pub fn lost_ledger(
    state_dir: &Path,
    state_given: bool,
    program: &Program,
    out_dir: &Path,
) -> Option<String> {
    use group::ledger::{default_dir, ledgers_beside, ledgers_in, recorded_releases};
    let id = program.info.id.as_str();
    let recorded = recorded_releases(state_dir)?;
    if let Some((from, to)) = super::execute::published_period(out_dir, id)
        && !recorded
            .iter()
            .any(|(p, f, t)| p == id && *f == from && *t == to)
    {
        return Some(format!(
            "the output folder {} holds a group report of this program for {from} to {to}, which \
             the group-report ledger {} does not record{}, so this report could not be audited \
             against it and a difference of the two could give away a small group's figures; \
             name the ledger that recorded it with --state (or report.state_dir), or give \
             --new-ledger to start the audit again from nothing (the sponsor keeps that report)",
            out_dir.display(),
            state_dir.display(),
            if recorded.is_empty() {
                " (it records no release: deleted, moved or new)"
            } else {
                " (an older or another copy?)"
            }
        ));
    }
    if recorded.iter().any(|(p, _, _)| p == id) {
        return None;
    }
    let cwd = std::env::current_dir().unwrap_or_default();
    let root = cwd.join(&program.root);
    let own = default_dir(out_dir);
    let mut others = vec![
        default_dir(&root.join(&program.def.report.out)),
        own.clone(),
    ];
    if let (true, Some(d)) = (state_given, &program.def.report.state_dir) {
        others.push(root.join(d));
    }
    others.extend(ledgers_beside(&cwd.join(&own), id));
    // The program folder's own ledgers: `report.out` moved to another parent folder gave the
    // program a new "own" ledger there, silently, beside the one that recorded every release.
    others.extend(ledgers_in(&root, None, id));
    let records_it =
        |d: &Path| recorded_releases(d).is_some_and(|r| r.iter().any(|(p, _, _)| p == id));
    let other = others.iter().find(|d| records_it(d))?;
    Some(format!(
        "the group-report ledger {} records no group report of this program, while {} records \
         its earlier ones, so this report would not be audited against them and a difference \
         of two reports could give away a small group's figures; name that ledger with --state \
         (or report.state_dir), or give --new-ledger to start the audit again from nothing",
        state_dir.display(),
        other.display()
    ))
}

/// Resolves the plan: loads and checks the program and its modules, the period and the output
/// folder.
pub fn plan(args: &RunOptions, today: NaiveDate) -> Result<RunPlan, PlanError> {
    let (program, modules) = load_checked(&args.program)?;
    no_tilde("--out", args.out.as_deref())?;
    no_tilde("--state", args.state.as_deref())?;
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
        let mut f = args.formats.clone();
        f.sort();
        f.dedup();
        f
    };
    let jobs = args.jobs.unwrap_or_else(|| {
        std::thread::available_parallelism()
            .map(|n| n.get())
            .unwrap_or(1)
            .min(crate::limits::MAX_JOBS)
    });
    if jobs == 0 {
        return Err(usage("--jobs must be at least 1".into()));
    }
    if jobs > crate::limits::MAX_JOBS {
        return Err(usage(format!(
            "--jobs must be at most {} (one worker thread each), found {jobs}",
            crate::limits::MAX_JOBS
        )));
    }
    let key = run_key(&program, &modules, period, as_of, &formats)?;
    let group_report = args.only.is_empty() && args.shard.is_none();
    let (state_dir, state_source) =
        group::ledger::resolve_dir(args.state.as_deref(), &program, &out_dir, group_report)
            .map_err(usage)?;
    let lost_ledger = (group_report && !args.new_ledger)
        .then(|| lost_ledger(&state_dir, args.state.is_some(), &program, &out_dir))
        .flatten();
    Ok(RunPlan {
        program,
        modules,
        period,
        period_named: args.period.is_some() || (args.from.is_some() && args.to.is_some()),
        as_of,
        out_dir,
        out_named_by,
        formats,
        only: args.only.clone(),
        jobs,
        incremental: args.incremental,
        shard: args.shard,
        access: access(args.group_readable),
        key,
        state_dir,
        state_source,
        lost_ledger,
    })
}

/// The plan of `merge`: the program from the command line; period, as-of date and formats from
/// the shards' run key (the caller checks the recomputed key equals the shards').
pub fn plan_for_merge(
    args: &MergeOptions,
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
    no_tilde("--out", args.out.as_deref())?;
    no_tilde("--state", args.state.as_deref())?;
    let (out_dir, out_named_by) = match &args.out {
        Some(o) => (o.clone(), "--out"),
        None => (program.root.join(&program.def.report.out), "report.out"),
    };
    let key = run_key(&program, &modules, period, as_of, &formats)?;
    let (state_dir, state_source) =
        group::ledger::resolve_dir(args.state.as_deref(), &program, &out_dir, only.is_empty())
            .map_err(usage)?;
    let lost_ledger = (only.is_empty() && !args.new_ledger)
        .then(|| lost_ledger(&state_dir, args.state.is_some(), &program, &out_dir))
        .flatten();
    Ok(RunPlan {
        program,
        modules,
        period,
        period_named: false,
        as_of,
        out_dir,
        out_named_by,
        formats,
        only,
        jobs: 1,
        incremental: false,
        shard: None,
        access: access(args.group_readable),
        key,
        state_dir,
        state_source,
        lost_ledger,
    })
}

fn format_name(f: &Format) -> String {
    format!("{f:?}").to_lowercase()
}

/// The run key: hashes of `program.yaml` and the template folder, the modules' settings,
/// period, as-of date, formats, tool version and build.
pub fn run_key(
    program: &Program,
    modules: &ModuleSet,
    period: Period,
    as_of: NaiveDate,
    formats: &[Format],
) -> Result<RunKey, PlanError> {
    let read = |p: &Path| {
        crate::limits::read_input(p).map_err(|e| {
            invalid(vec![Diagnostic::error(
                p.display().to_string(),
                format!("cannot read ({e})"),
            )])
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
            // The files the template loader reads, and nothing else: a video or a backup kept
            // beside the templates was read whole here, and one over the input size limit
            // stopped the run (exit 3) that `check` had passed; a `report.templates: ..` or `/`
            // read every `.hbs` file of the whole tree. A folder the loader refuses (a link)
            // stops the run when the templates load.
            let files = crate::report::templates::override_files(&dir).unwrap_or_default();
            for (name, path) in files {
                h.update(name.as_bytes());
                h.update(&[0]);
                h.update(blake3::hash(&read(&path)?).as_bytes());
            }
            h.finalize().to_hex().to_string()
        }
    };
    Ok(RunKey {
        tool: format!("cohortpress {}", env!("CARGO_PKG_VERSION")),
        build: super::partial::build_fingerprint().to_string(),
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
    args: &RunOptions,
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
    let from_program_yaml = args.period.is_none() && (args.from.is_none() || args.to.is_none());
    if from > to
        && from_program_yaml
        && program.def.report.period == DefaultPeriod::LastFullMonth
        && raw.to < start
    {
        // A monthly cron line that starts before the program's first month has ended read
        // "command line: the period 2025-12-01 to 2025-12-31 lies outside the program", about a
        // command line that named no period: say where the period came from and when the
        // first report can be made.
        let first_month = start.with_day(1).expect("day 1 exists");
        let next = first_month
            .checked_add_months(chrono::Months::new(1))
            .expect("date in range");
        // Before the program has started there is no part of it to report now: `--from
        // {start} --to {as_of}` would end before it begins, and is refused.
        let now = if as_of >= start {
            format!(" (or now with `--from {start} --to {as_of}`)")
        } else {
            "; the program starts after the as-of date, so no part of it can be reported yet"
                .to_string()
        };
        return Err(format!(
            "no full month of the program has ended by the as-of date {as_of}: program.yaml's `report.period: last_full_month` gives {} to {}, before the program starts on {start}; the first month, {}, can be reported from {next}{now}",
            raw.from,
            raw.to,
            first_month.format("%Y-%m"),
        ));
    }
    if from > to {
        // After the end (a monthly line's `--period` of a month after it): say that the
        // program is over, not only that the dates lie outside it.
        let ended = if raw.from > end && as_of > end {
            format!(
                ": the program ended on {end}, so nothing is reported and nothing was written; \
                 remove the line that starts this run (without --period a run reports the \
                 program's last month again)"
            )
        } else {
            String::new()
        };
        return Err(format!(
            "the period {} to {} lies outside the program ({start} to {end}){ended}",
            raw.from, raw.to
        ));
    }
    if from > as_of {
        return Err(format!(
            "the period starts {from}, after the as-of date {as_of}"
        ));
    }
    // A period still under way (`--period` of this month, `--to` after the as-of date) is
    // reported up to the as-of date: the days after it have not happened, and counted as days
    // without weigh-ins they made a report say "nothing recorded for 27 days" on the 3rd.
    if to > as_of {
        tracing::warn!(
            "the period {from} to {to} ends after the as-of date {as_of}: it is reported up to {as_of}"
        );
    }
    Ok(Period {
        from,
        to: to.min(as_of),
    })
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

/// Who may read the outputs.
pub fn access(group_readable: bool) -> Access {
    if group_readable {
        Access::Group
    } else {
        Access::Owner
    }
}

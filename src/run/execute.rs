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

use super::partial::{self, DiagRecord, InputRecord, ParticipantRecord, SummaryRecord, TidyRecord};
use super::shard::{self, ShardFile};
use super::{Blame, RunError, RunPlan, RunSummary, Timing};
use crate::diag::{Diagnostic, LogLevel, Severity};
use crate::group::{self, GroupOptions, ParticipantSummary};
use crate::modules::ModuleResults;
use crate::output::{OutputSet, Staging};
use crate::participant::{self, InputFile, ParticipantDir};
use crate::report;
use crate::tidy;
use cohortpress_metric_api::ParticipantData;
use cohortpress_metric_trend::view::Status;
use rayon::prelude::*;
use std::collections::BTreeMap;
use std::path::Path;
use std::sync::Mutex;
use std::time::Instant;

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
            by: Blame::Program,
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
            // `--only SG-001,SG-002` names one folder called so; say how to name several.
            let listed = unknown
                .iter()
                .find(|u| {
                    u.contains(',') && u.split(',').all(|p| dirs.iter().any(|d| d.id == p.trim()))
                })
                .map(|u| {
                    let each: Vec<String> = u
                        .split(',')
                        .map(|p| format!("--only {}", p.trim()))
                        .collect();
                    format!(
                        " (to name several participants, give each its own --only: `{}`)",
                        each.join(" ")
                    )
                })
                .unwrap_or_default();
            // A folder that is there but refused (a link, a device name, ids that differ only
            // in case) was "no participant folder named …", which sent people looking for a
            // folder they could see.
            let refused: Vec<String> = unknown
                .iter()
                .filter_map(|u| {
                    discovery
                        .iter()
                        .filter(|d| participant::is_refused_folder(d))
                        .find(|d| refused_folder_name(d) == Some(u))
                        .map(|d| format!("; `{u}` is there but refused: {}", d.message))
                })
                .collect();
            return Err(RunError::Refused {
                message: format!(
                    "--only: no usable participant folder named {} in {}{}; nothing was written{listed}",
                    unknown.join(", "),
                    plan.program
                        .root
                        .join(participant::PARTICIPANTS_DIR)
                        .display(),
                    refused.concat()
                ),
                by: Blame::CommandLine,
            });
        }
        dirs.retain(|d| plan.only.contains(&d.id));
    }
    if let Some(s) = plan.shard {
        dirs.retain(|d| s.contains(&d.id));
    }
    Ok((dirs, discovery))
}

/// The folder a refused-folder diagnostic of discovery names (`participants/NAME`): its id
/// when it has one, else the name as printed.
fn refused_folder_name(d: &Diagnostic) -> Option<&str> {
    d.participant.as_deref().or_else(|| {
        d.file
            .strip_prefix(participant::PARTICIPANTS_DIR)
            .and_then(|f| f.strip_prefix('/'))
    })
}

/// The discovery diagnostics a run of some participants answers for: all of them, except the
/// folders refused while listing `participants/` that it was not asked about. A run with
/// `--only SG-003` (a cron administrator re-running one person) counted a symbolic link or a
/// misnamed folder elsewhere among its participants with errors and ended with exit code 4,
/// though it never looked at that folder; each shard counted every refused folder of the
/// program, so a folder was counted once per shard. Now `--only` answers for the folders it
/// names, a shard for the folders of its own share (by the same hash as its participants), and
/// a whole run or a merge for every one. A shard's file still keeps every discovery
/// diagnostic, which the merge reports.
fn answered_discovery(
    only: &[String],
    shard: Option<shard::ShardSpec>,
    discovery: &[Diagnostic],
) -> Vec<Diagnostic> {
    discovery
        .iter()
        .filter(|d| {
            !participant::is_refused_folder(d)
                || refused_folder_name(d).is_none_or(|name| {
                    (only.is_empty() || only.iter().any(|o| o == name))
                        && shard.is_none_or(|s| s.contains(name))
                })
        })
        .cloned()
        .collect()
}

/// Executes a plan: every participant, then (unless it is a shard) the group step and all
/// outputs.
pub fn execute(plan: &RunPlan) -> Result<(RunSummary, Timing), RunError> {
    let (dirs, discovery) = select_participants(plan)?;
    let templates =
        crate::report::templates::load_checked(&plan.program).map_err(|d| RunError::Invalid {
            by: super::Blame::Program,
            diagnostics: vec![d],
        })?;
    // The output folder first: a path through a file names the file, not the ledger beside it.
    plan.check_output()?;
    if plan.shard.is_none() {
        check_ledger_folder(plan)?;
    }
    let staging = plan.begin_staging()?;
    // Folders refused while listing `participants/` are counted as `check` counts them (among
    // the participants, not usable) and named in the errors below; a run of some participants
    // (`--only`, a shard) counts its own.
    let refused = answered_discovery(&plan.only, plan.shard, &discovery)
        .iter()
        .filter(|d| participant::is_refused_folder(d))
        .count();
    tracing::info!(
        "program {}: {} participants{}{}, period {} to {}, as of {}",
        plan.program.info.id,
        dirs.len() + refused,
        match refused {
            0 => String::new(),
            1 => " (1 folder refused)".to_string(),
            n => format!(" ({n} folders refused)"),
        },
        plan.shard
            .map(|s| format!(" in shard {s}"))
            .unwrap_or_default(),
        plan.period.from,
        plan.period.to,
        plan.as_of
    );
    if let Some(note) = plan.ended_note() {
        tracing::info!("{note}");
    }
    // The cron line's period went back: its output folder holds a later month than the one
    // program.yaml's rule gives for this as-of date (a clock set back, a wrong `--as-of`), and
    // the run replaced March's reports with December's without a word (tryout24).
    if !plan.period_named
        && plan.only.is_empty()
        && plan.shard.is_none()
        && let Some((from, to)) = published_period(&plan.out_dir, &plan.program.info.id)
        && to > plan.period.to.to_string()
    {
        tracing::warn!(
            "{} holds the reports of {from} to {to}, a later period than this run's ({} to {}, \
             which program.yaml's `report.period` gives for the as-of date {}): this run \
             replaces them with the earlier period's; if the machine's clock or --as-of is \
             wrong, correct it and run again, which makes the later period's reports again; \
             to make an earlier month on purpose, name it with --period and an --out of its own",
            plan.out_dir.display(),
            plan.period.from,
            plan.period.to,
            plan.as_of
        );
    }

    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(plan.jobs)
        .build()
        .map_err(|e| RunError::Output(format!("cannot start worker threads: {e}")))?;
    let key_hash = plan.key.hash();
    let written = if plan.incremental {
        written_partials(staging.final_dir())
    } else {
        BTreeMap::new()
    };
    // One person's weigh-ins in two folders, found before any report is written so that both
    // reports say so; over every folder of the program, so `--only` and each shard find the
    // same copies as a whole run.
    let copies = participant::copied_weigh_ins(&participant::discover(&plan.program).0);
    let phase = Instant::now();
    let progress = crate::progress::Progress::new(dirs.len() as u64);
    let columns = Mutex::new(tidy::Columns::new(plan.modules.ids()));
    let results: Vec<Result<(ParticipantRecord, bool), RunError>> = pool.install(|| {
        dirs.par_iter()
            .map(|dir| {
                // Each folder is opened and listed once, for reuse and for loading.
                let opened = participant::open(dir);
                let names = opened.names();
                let own_copies: Vec<&Diagnostic> = copies
                    .iter()
                    .filter(|d| d.participant.as_deref() == Some(dir.id.as_str()))
                    .collect();
                let reused = if plan.incremental {
                    reuse_participant(
                        plan,
                        &key_hash,
                        &staging,
                        dir,
                        &names,
                        &own_copies,
                        &written,
                    )?
                } else {
                    None
                };
                let (mut rec, was_reused) = match reused {
                    Some(rec) => (rec, true),
                    None => {
                        let job = Job {
                            plan,
                            key_hash: &key_hash,
                            templates: &templates,
                            staging: &staging,
                        };
                        (
                            process_participant(&job, dir, opened, names, &own_copies)?,
                            false,
                        )
                    }
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
    // Counted as the last line counts participants reported: a folder not reported (no usable
    // profile, or enrolled after the period) was counted as one reused ("51 participants
    // reused" in a run of 50 participants reported).
    let (mut reused, mut recomputed, mut left_out) = (0usize, 0usize, 0usize);
    for r in results {
        let (rec, was_reused) = r?;
        match (rec.summary.is_some(), was_reused) {
            (false, _) => left_out += 1,
            (true, true) => reused += 1,
            (true, false) => recomputed += 1,
        }
        records.push(rec);
    }
    let participants_s = phase.elapsed().as_secs_f64();
    if plan.incremental {
        tracing::info!(
            "incremental: {reused} participants reused, {recomputed} recomputed{}",
            match left_out {
                0 => String::new(),
                1 => ", not counting 1 folder not reported".to_string(),
                n => format!(", not counting {n} folders not reported"),
            }
        );
    }

    if let Some(s) = plan.shard {
        let (summary, _, _, _) = tally(
            &answered_discovery(&plan.only, Some(s), &discovery),
            &records,
        );
        let file = ShardFile {
            format: shard::FORMAT,
            shard: s.index,
            of: s.count,
            program_id: plan.program.info.id.clone(),
            key: plan.key.clone(),
            only: plan.only.clone(),
            discovery: discovery.iter().map(DiagRecord::from_diagnostic).collect(),
            participants: records.iter().map(|r| r.id.clone()).collect(),
            outputs: staging.files(),
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
        rec.consent_withdrawn = t.consent_withdrawn().map(str::to_string);
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
            .filter(|d| participant::is_refused_folder(d))
            .count(),
        ..Default::default()
    };
    let mut all_diags: Vec<Diagnostic> = discovery.to_vec();
    let mut rows = Vec::new();
    let mut inputs: Vec<InputFile> = Vec::new();
    // One person's weigh-ins in two folders: an error for each (found before the reports, and
    // kept in each record), and neither in the group step (their own reports are written and
    // say so). Left out also when the other folder proved unusable: whose weigh-ins they are
    // cannot be told, and the report has already said the folder is not counted.
    let mut same = Vec::new();
    let mut excluded = std::collections::BTreeSet::new();
    for r in records {
        let diags = r.diagnostics();
        for d in diags.iter().filter(|d| participant::is_copy_of_another(d)) {
            same.push(d.clone());
            excluded.insert(r.id.as_str());
        }
        if diags.iter().any(|d| d.severity == Severity::Error) {
            summary.participants_with_errors += 1;
        }
        summary.warnings += diags
            .iter()
            .filter(|d| d.severity == Severity::Warning)
            .count();
        summary.module_failures += r.failures.len();
        for (m, msg) in &r.failures {
            tracing::warn!(
                participant = r.id.as_str(),
                module = m.as_str(),
                "{}: module {m} failed: {msg}",
                r.id
            );
        }
        all_diags.extend(diags);
        inputs.extend(r.input_files());
        // A usable participant has a summary row (and a report and tidy metrics).
        if let Some(s) = &r.summary {
            summary.reported += 1;
            if excluded.contains(r.id.as_str()) {
                continue;
            }
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
                } else if same.contains(d) {
                    "left out of the group report: "
                } else {
                    "file not used: "
                };
                // At ERROR: these are why the run ends with exit code 4 ("some inputs had
                // errors"), and a log collector alerting on ERROR lines missed them at WARN.
                d.log(
                    LogLevel::Error,
                    &d.to_string()
                        .replacen("error: ", what, 1)
                        .replace('\n', " |"),
                )
            }
            // A participant's warnings are counted in the last line and listed in
            // data-quality.csv; one about the program folder (a stray file, a link) is logged:
            // alone, it made a run end with exit code 1 whose log said "0 warnings" and no why.
            Severity::Warning => {
                let level = if d.participant.is_none() {
                    LogLevel::Warn
                } else {
                    LogLevel::Debug
                };
                d.log(level, &d.to_string().replace('\n', " |"))
            }
        }
    }
    log_participant_warnings(&all_diags);
    inputs.sort_by(|a, b| a.path.cmp(&b.path));
    (summary, all_diags, rows, inputs)
}

/// Participants shown by name in [`log_participant_warnings`]; the rest are counted.
const WARNED_PARTICIPANTS_SHOWN: usize = 20;

/// One WARN line that says whose files the participants' warnings are about, each file with
/// its count and its first warning (line and message, cut at 120 characters). The last line
/// only counted them ("4 warnings"), each was logged at DEBUG, so an administrator had to
/// open `metrics/data-quality.csv` to tell this month's exit code 1 from last month's: the
/// rows after a known withdrawal, or a weights file cut short by a crashed sync.
fn log_participant_warnings(diags: &[Diagnostic]) {
    use std::collections::BTreeMap;
    let mut by_participant: BTreeMap<&str, BTreeMap<&str, (usize, &Diagnostic)>> = BTreeMap::new();
    for d in diags.iter().filter(|d| d.severity == Severity::Warning) {
        let Some(p) = d.participant.as_deref() else {
            continue;
        };
        let file = d.file.rsplit('/').next().unwrap_or(&d.file);
        by_participant
            .entry(p)
            .or_default()
            .entry(file)
            .and_modify(|(n, _)| *n += 1)
            .or_insert((1, d));
    }
    if by_participant.is_empty() {
        return;
    }
    let total: usize = by_participant
        .values()
        .flat_map(|files| files.values().map(|(n, _)| n))
        .sum();
    let mut parts: Vec<String> = by_participant
        .iter()
        .take(WARNED_PARTICIPANTS_SHOWN)
        .map(|(p, files)| {
            let files: Vec<String> = files
                .iter()
                .map(|(file, (n, first))| {
                    let at = first
                        .line
                        .map(|l| format!("line {l}: "))
                        .unwrap_or_default();
                    let mut message: String = first.message.chars().take(120).collect();
                    if first.message.chars().count() > 120 {
                        message.push('…');
                    }
                    format!("{file} {n} ({at}{message})")
                })
                .collect();
            format!("{p}: {}", files.join(", "))
        })
        .collect();
    if by_participant.len() > WARNED_PARTICIPANTS_SHOWN {
        parts.push(format!(
            "and {} more participants",
            by_participant.len() - WARNED_PARTICIPANTS_SHOWN
        ));
    }
    tracing::warn!(
        "{total} input warning{} in the files of {} participant{}, each listed in \
         metrics/data-quality.csv (and by `cohortpress check`): {}",
        if total == 1 { "" } else { "s" },
        by_participant.len(),
        if by_participant.len() == 1 { "" } else { "s" },
        parts.join("; ")
    );
}

/// Refuses, before any participant is computed, a ledger folder the group step could not open
/// (see [`group::ledger::Ledger::check_folder`]); `Ok` when the run writes no group report.
pub fn check_ledger_folder(plan: &RunPlan) -> Result<(), RunError> {
    if !plan.only.is_empty() {
        return Ok(());
    }
    group::ledger::Ledger::check_folder(&plan.state_dir, plan.state_source)
        .map_err(|e| RunError::Output(format!("group-report ledger: {e}")))?;
    // A usable ledger that does not record the program's earlier group reports, without
    // --new-ledger: a wrong command line (exit 2), refused before anything is computed.
    match &plan.lost_ledger {
        Some(why) => Err(RunError::Invalid {
            by: super::Blame::CommandLine,
            diagnostics: vec![Diagnostic::error("command line", why.clone())],
        }),
        None => Ok(()),
    }
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
    let (mut summary, all_diags, rows, inputs) =
        tally(&answered_discovery(&plan.only, None, discovery), records);
    if let Some(note) = after_end_note(plan.program.info.end, records) {
        tracing::info!("{note}");
    }

    // Group step and group reports. A run of hand-picked participants (`--only`, also when
    // its shards are merged) writes none: a group report of everyone but one, set against the
    // complete one, would give that one person's figures, and a partial output has a ledger
    // of its own (beside its own folder), so the audit across releases would not see it.
    let phase = Instant::now();
    let mut release = None;
    let mut group = None;
    if plan.only.is_empty() {
        let opts = GroupOptions {
            min_cell_size: plan.program.def.privacy.min_cell_size,
            group_by: plan.program.def.report.group_by.clone(),
            confidence: 0.95,
        };
        // Group-report ledger hook: audit against what earlier reports published, record
        // before the outputs are put in place (see below).
        let ledger = group::ledger::Ledger::open(&plan.state_dir)
            .map_err(|e| RunError::Output(format!("group-report ledger: {e}")))?;
        // A new ledger beside an output that holds a group report of an earlier run: the
        // ledger was deleted or moved (or the state folder changed), and the audit starts
        // again from nothing while the sponsor keeps the earlier reports.
        let earlier_group_report =
            plan.out_dir.join("group").is_dir() && plan.out_dir.join("manifest.json").is_file();
        // (Without --new-ledger the plan refused it: `plan::lost_ledger`.)
        let named_out_and_state =
            plan.out_named_by == "--out" && plan.state_source == group::ledger::StateSource::Named;
        if ledger.is_new() && earlier_group_report && !named_out_and_state {
            tracing::warn!(
                "group-report ledger {}: a new ledger, but {} holds a group report of an \
                 earlier run, which this one is not audited against; if its ledger was moved, \
                 name it with --state (or report.state_dir), or a difference of two reports may \
                 give away a small group's figures",
                ledger.dir().display(),
                plan.out_dir.display()
            );
        }
        // A ledger that does not hold the release of the group report already in the output
        // folder: an older copy of the ledger (restored from another backup than the output),
        // another copy of it, or one emptied by hand. That report is not audited against, as
        // with a new ledger, and was silent.
        if !ledger.is_new()
            && let Some((from, to)) = published_period(&plan.out_dir, &plan.program.info.id)
            && !ledger.has_release(&plan.program.info.id, &from, &to)
        {
            tracing::warn!(
                "group-report ledger {}: {} holds a group report of this program for {from} to \
                 {to}, which the ledger does not record (an older or another copy of the \
                 ledger?), so this group report is not audited against it; if that report's \
                 ledger is elsewhere, name it with --state (or report.state_dir), or a \
                 difference of two reports may give away a small group's figures",
                ledger.dir().display(),
                plan.out_dir.display()
            );
        }
        // The program's own ledger, made because no ledger recorded it: every later run
        // finds it, whatever `--out` says, so this is no longer a warning.
        if ledger.is_new() && plan.state_source == group::ledger::StateSource::ProgramsNew {
            tracing::info!(
                "group-report ledger {}: created as this program's own ledger, beside \
                 report.out, since no ledger records its group reports yet (none there, none \
                 of the output folder, none beside it); every later run of the program is \
                 audited against it, whatever --out says; if earlier reports of this program \
                 were recorded in a ledger elsewhere, name that one with --state (or \
                 report.state_dir) instead",
                ledger.dir().display()
            );
        }
        if ledger.is_new()
            && plan.out_named_by == "--out"
            && plan.state_source == group::ledger::StateSource::Named
        {
            tracing::warn!(
                "group-report ledger {}: a new ledger, so this group report is audited against \
                 no earlier release; if earlier group reports of this program were written \
                 elsewhere, run with --state naming their ledger folder (or set \
                 report.state_dir), or a difference of two reports may give away a small \
                 group's figures",
                ledger.dir().display()
            );
        }
        // A group_by key no profile gives (checked here, over the group step's rows, so a
        // merge of shards says it as a whole run does).
        for d in participant::group_keys_nobody_has(&plan.program, rows.iter().map(|r| &r.groups)) {
            d.log(LogLevel::Warn, &d.to_string().replace('\n', " |"));
            summary.program_warnings += 1;
        }
        let program_id = plan.program.info.id.clone();
        let (period_from, period_to) = (plan.period.from.to_string(), plan.period.to.to_string());
        let period_words = format!("{period_from} to {period_to}");
        // A month the monthly run missed: no later run said so, and its participants never got
        // that month's report. Logged at WARN, once: by the first run of the month after the
        // gap (a re-run of it, or the program's last month reported again after the end, finds
        // this one's release). The exit code is unchanged: this run's own output is complete.
        let missed = if ledger.has_release(&program_id, &period_from, &period_to) {
            Vec::new()
        } else {
            ledger.months_missed_before(&program_id, plan.period.from)
        };
        if !missed.is_empty() {
            let months: Vec<String> = missed
                .iter()
                .map(|m| m.format("%Y-%m").to_string())
                .collect();
            let (one, many) = (missed.len() == 1, months.join(", "));
            let (it, its, that) = if one {
                ("it", "its", "that month")
            } else {
                ("them", "their", "those months")
            };
            let last = missed
                .first()
                .and_then(|m| m.pred_opt())
                .map(|d| d.format("%Y-%m").to_string())
                .unwrap_or_default();
            tracing::warn!(
                "group-report ledger {}: no report of this program was made for the month{} \
                 {many}, between the last month recorded ({last}) and this run's ({}): no run \
                 reported {it} (the machine was off on the day, the cron line paused, the clock \
                 wrong), so {its} participants have no report of {that} and the sponsor no \
                 group report; to make {it}, run `cohortpress run {} --period {} --out DIR` \
                 with an output folder of its own for each month (into {} it would replace \
                 this month's reports)",
                ledger.dir().display(),
                if one { "" } else { "s" },
                plan.period.from.format("%Y-%m"),
                plan.program.root.display(),
                months[0],
                plan.out_dir.display(),
            );
        }
        // A period already released (a re-run, a cron job retried) is first audited without its
        // own earlier issues: a result that is one of them publishes nothing the sponsor has
        // not had, and is kept. Audited against the release of the very same figures, the
        // re-run hid more (an 80-person demo program lost week 22 of its mean weight change by
        // week) and the month got a second, different group report.
        let reissue = ledger
            .history_without_period(&program_id, &period_from, &period_to)
            .map(|h| group::summarize_release(&rows, &opts, &h))
            .filter(|(g, p)| {
                let line = report::group::headline(g, &period_words);
                let figures = ledger.figures_key(&printed_figures(g));
                ledger.issued(&program_id, &period_from, &period_to, &line, p, &figures)
            });
        let (mut g, published) = match reissue {
            Some(same) => same,
            None => group::summarize_release(&rows, &opts, &ledger.history()),
        };
        let headline = report::group::headline(&g, &period_words);
        g.releases = ledger.earlier_headlines(&program_id, &period_to);
        g.releases.push(headline.clone());
        // Who the group report leaves out: participants without a row in it (an unusable
        // profile, or one person's weigh-ins in two folders) and folders skipped by name. A
        // participant with one unusable file is still reported and counted, so
        // `participants_with_errors` (which counts them too, for the exit code) is not this
        // number.
        let left_out = summary.participants - rows.len() + summary.skipped_folders;
        let group_ctx = report::group_context(&plan.report_scope(), &g, left_out);
        let group_files = report::render_group(templates, &group_ctx, &plan.formats)
            .map_err(|e| RunError::Render(e.to_string()))?;
        for (name, bytes) in group_files {
            staging.write(&format!("group/{name}"), &bytes)?;
        }
        let figures = ledger.figures_key(&printed_figures(&g));
        // Consent withdrawn on a day before releases that did not know it (recorded in the
        // profile months later): those months' reports were made with the person still in
        // the program, their data after the withdrawal included. Said once: this release
        // records the withdrawals it knows.
        let mut withdrawals = Vec::new();
        for r in records {
            let Some(day) = r.consent_withdrawn.as_deref() else {
                continue;
            };
            let key = ledger.withdrawal_key(&r.id, day);
            let months = ledger.released_before_withdrawal(&program_id, &key, day);
            if !months.is_empty() {
                let list = months
                    .iter()
                    .map(|(f, t)| format!("{f} to {t}"))
                    .collect::<Vec<_>>()
                    .join(", ");
                tracing::warn!(
                    "participants/{}: consent withdrawn on {day} (profile.yaml's `withdrew`), \
                     recorded after the reports of {list} were released: those reports were \
                     made with this person still in the program, with their data after {day} \
                     (their own report of each, and the group report's figures). This run \
                     leaves that data out. What to do: tell whoever received those reports, as \
                     your data-protection rules say, and make them again without it \
                     (`cohortpress run PROGRAM --period YYYY-MM --out …` for each); stop \
                     whatever still adds records to the folder and remove the rows dated after \
                     {day}. This is said once.",
                    r.id
                );
                summary.program_warnings += 1;
            }
            withdrawals.push(key);
        }
        let mut record = group::ledger::release_record(
            &program_id,
            &period_from,
            &period_to,
            &plan.as_of.to_string(),
            headline,
            published,
            figures,
        );
        withdrawals.sort();
        record.withdrawals = Some(withdrawals);
        release = Some((ledger, record));
        group = Some(g);
    } else {
        tracing::info!(
            "--only: no group report (a group report covers the whole program, never a hand-picked subset)"
        );
    }
    timing.group_s = phase.elapsed().as_secs_f64();

    // ---- Clinician follow-up list (only when `followup.recipient` is set) ----
    // Identified: its own folder, owner-only whatever `--group-readable` says, and built from
    // the records alone, never from (or into) the group step.
    if plan.program.def.followup.is_some() {
        let list: Vec<_> = records.iter().filter_map(|r| r.followup.clone()).collect();
        let files = report::followup::render(&plan.report_scope(), templates, &list, &plan.formats)
            .map_err(|e| RunError::Render(e.to_string()))?;
        for (name, bytes) in files {
            staging.write_private(&format!("{}/{name}", report::followup::FOLDER), &bytes)?;
        }
    }
    // ---- end of the follow-up hook ----

    // Tidy metrics.
    let phase = Instant::now();
    let ids: Vec<String> = records.iter().map(|r| r.id.clone()).collect();
    write_tidy(plan, columns, &ids, &staging, &all_diags, group.as_ref())
        .map_err(|e| RunError::Output(e.to_string()))?;
    timing.tidy_s = phase.elapsed().as_secs_f64();

    // Manifest last: it lists every other output.
    let phase = Instant::now();
    let manifest = super::manifest::manifest(plan, &inputs, &staging, &summary)
        .map_err(|e| RunError::Output(e.to_string()))?;
    staging.write("manifest.json", &manifest)?;
    // The release is recorded before the swap: a group report in place but missing from the
    // ledger (its write refused, or the run killed in between) was left out of every later
    // audit, so next month's report could be differenced against it, and the run ended with
    // exit 6 ("previous outputs left intact") over the new output. Recorded first, a failed
    // write stops the run with the previous output in place; a swap that fails after it
    // leaves a record of a report never published, which only makes later audits stricter.
    if let Some((mut ledger, record)) = release {
        ledger.record(record).map_err(|e| {
            RunError::Output(format!("group-report ledger: {e}; {}", staging.kept()))
        })?;
    }
    let outputs: OutputSet = staging.commit()?;
    timing.commit_s = phase.elapsed().as_secs_f64();
    tracing::debug!("{} output files", outputs.files);
    Ok((summary, timing))
}

/// The period (`period_from`, `period_to`) of the complete output of program `program_id` in
/// `out_dir` when it holds a group report, from its `manifest.json` (read like an input).
pub(crate) fn published_period(out_dir: &Path, program_id: &str) -> Option<(String, String)> {
    if !out_dir.join("group").is_dir() {
        return None;
    }
    let bytes = crate::limits::read_input(&out_dir.join("manifest.json")).ok()?;
    let m: serde_json::Value = serde_json::from_slice(&bytes).ok()?;
    let ours = m["tool"]
        .as_str()
        .is_some_and(|t| t.starts_with("cohortpress "))
        && m["program_id"].as_str() == Some(program_id)
        && m["scope"].as_str() == Some("complete");
    ours.then(|| {
        Some((
            m["period_from"].as_str()?.to_string(),
            m["period_to"].as_str()?.to_string(),
        ))
    })?
}

/// The partial results (`cache/ID.json`) of the previous output in `out_dir` and their blake3
/// hashes, as its `manifest.json` (a shard's: its `shard.json`) lists them: a partial result is
/// reused only as it was written. Empty when neither reads.
fn written_partials(out_dir: &Path) -> BTreeMap<String, String> {
    let listed = ["manifest.json", shard::SHARD_FILE]
        .iter()
        .find_map(|name| {
            let bytes = crate::limits::read_input(&out_dir.join(name)).ok()?;
            let v: serde_json::Value = serde_json::from_slice(&bytes).ok()?;
            v["outputs"].as_array().cloned()
        });
    listed
        .unwrap_or_default()
        .iter()
        .filter_map(|f| {
            let path = f["path"].as_str()?;
            let hash = f["blake3"].as_str()?;
            path.starts_with(&format!("{}/", partial::CACHE_DIR))
                .then(|| (path.to_string(), hash.to_string()))
        })
        .collect()
}

/// `--incremental`: the participant's previous record and reports, copied into staging, when
/// nothing they depend on changed: the run key, the folder listing and every input file's
/// hash, and the previous partial result and report files are intact (`written`: the partial
/// results the previous output's manifest lists). `None` means recompute.
fn reuse_participant(
    plan: &RunPlan,
    key_hash: &str,
    staging: &Staging,
    dir: &ParticipantDir,
    names: &[String],
    own_copies: &[&Diagnostic],
    written: &BTreeMap<String, String>,
) -> Result<Option<ParticipantRecord>, RunError> {
    let prev = staging.final_dir();
    let rel = partial::cache_path(&dir.id);
    // The previous output is read like an input: no links, no FIFOs or devices (which would
    // make the run wait or read forever), regular files within the size limit only.
    let Ok(bytes) = crate::limits::read_input(&prev.join(&rel)) else {
        return Ok(None);
    };
    // Edited since it was written (its figures feed the group report and the tidy metrics).
    if written.get(&rel).map(String::as_str) != Some(blake3::hash(&bytes).to_hex().as_str()) {
        return Ok(None);
    }
    let Some(rec) = ParticipantRecord::from_bytes(&bytes) else {
        return Ok(None);
    };
    if rec.id != dir.id || rec.run_key != key_hash || rec.listing != names {
        return Ok(None);
    }
    // A copy found or gone since (another folder changed): the report's notice changes.
    let had: Vec<Diagnostic> = rec
        .diagnostics()
        .into_iter()
        .filter(participant::is_copy_of_another)
        .collect();
    if had.iter().ne(own_copies.iter().copied()) {
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

/// What every participant's processing shares.
#[derive(Clone, Copy)]
struct Job<'a> {
    plan: &'a RunPlan,
    key_hash: &'a str,
    templates: &'a report::templates::TemplateSet,
    staging: &'a Staging,
}

/// Load → modules → participant report → written into staging, with the participant's
/// record (also written, as `cache/ID.json`). A participant's own problems never fail the run:
/// only an output write or template failure does.
fn process_participant(
    job: &Job<'_>,
    dir: &ParticipantDir,
    opened: participant::OpenedDir,
    names: Vec<String>,
    own_copies: &[&Diagnostic],
) -> Result<ParticipantRecord, RunError> {
    let Job {
        plan,
        key_hash,
        templates,
        staging,
    } = *job;
    let mut loaded =
        participant::load_opened(&plan.program, dir, opened, plan.as_of, Some(plan.period));
    // Kept with the participant's own problems: their report says it, and the data-quality
    // list and the log name it once.
    loaded
        .diagnostics
        .extend(own_copies.iter().map(|d| (*d).clone()));
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
        consent_withdrawn: None,
        after_end: loaded
            .data
            .as_ref()
            .map(|d| rows_after(d, plan.program.info.end))
            .unwrap_or_default(),
    };
    // Someone enrolled after the period's end was not in the program then: no report for it,
    // and not counted in its group figures (a re-issued earlier month would otherwise count
    // later joiners as enrolled without a start). A mistyped date is the other reading, so the
    // message says how to correct it.
    let data = loaded.data.filter(|d| {
        if d.profile.enrolled <= plan.period.to {
            return true;
        }
        let mut diag = Diagnostic::warning(
            format!("{}/{}/profile.yaml", participant::PARTICIPANTS_DIR, loaded.id),
            format!(
                "enrolled on {}, after this period ({} to {}): no report for this period, and not counted in its group figures",
                d.profile.enrolled, plan.period.from, plan.period.to
            ),
        )
        .participant(&loaded.id)
        .field("enrolled")
        .expected(format!("an enrolment date on or before {}", plan.period.to))
        .found(d.profile.enrolled.to_string())
        .hint("if the date is wrong, correct `enrolled` in profile.yaml; otherwise the participant is reported from the month they enrolled");
        if let Some(line) = loaded.enrolled_line {
            diag = diag.at(line, None);
        }
        diag.log(LogLevel::Warn, &diag.to_string().replace('\n', " |"));
        rec.diagnostics.push(DiagRecord::from_diagnostic(&diag));
        false
    });
    if let Some(data) = data {
        let results: ModuleResults =
            plan.modules
                .run(&plan.program.info, plan.period, plan.as_of, &data);
        rec.failures = results
            .failures
            .iter()
            .map(|f| (f.module.clone(), f.for_outputs()))
            .collect();
        let ctx =
            report::participant_context(&plan.report_scope(), &data, &results, &loaded.diagnostics);
        if plan.formats.contains(&crate::program::Format::Pdf) {
            // Logged now, and kept with the participant's other warnings (the data-quality list
            // and the run's warning count).
            let mut warn = |file: String, field: Option<&str>, message: String| {
                let text = format!("{}: {file}: {message}", data.profile.id);
                let mut d = Diagnostic::warning(file, message).participant(&data.profile.id);
                if let Some(f) = field {
                    d = d.field(f);
                }
                d.log(LogLevel::Warn, &text);
                rec.diagnostics.push(DiagRecord::from_diagnostic(&d));
            };
            if let Some(missing) = report::pdf_name_fallback(&ctx) {
                warn(
                    format!("{}/{}/profile.yaml", participant::PARTICIPANTS_DIR, dir.id),
                    Some("name"),
                    format!(
                        "the PDF's font has no glyph for {} in the participant's name; the PDF names the participant by id instead (the HTML keeps the name)",
                        glyph_list(&missing)
                    ),
                );
            }
            let missing = report::pdf_unshowable_text(&ctx);
            if !missing.is_empty() {
                warn(
                    format!("{}/{}", participant::PARTICIPANTS_DIR, dir.id),
                    None,
                    format!(
                        "the PDF's font has no glyph for {} in the report's text (a site, team, activity or other name from the inputs); they show as empty boxes in the PDF (the HTML shows them)",
                        glyph_list(&missing)
                    ),
                );
            }
        }
        let files = report::render_participant(templates, &ctx, &plan.formats)
            .map_err(|e| RunError::Render(format!("participant {}: {e}", data.profile.id)))?;
        // Each report is written and dropped at once: no report bytes outlive this loop.
        for (ext, bytes) in files {
            let written =
                staging.write(&format!("participants/{}.{ext}", data.profile.id), &bytes)?;
            rec.reports.push(written);
        }
        rec.reports.sort();
        let summary = summary_row(plan, &data, &results);
        rec.summary = Some(SummaryRecord::from_summary(&summary));
        rec.tidy = Some(TidyRecord::from_tidy(tidy::participant(
            &data,
            &results,
            &summary,
            plan.period.to,
            &loaded.rows,
            {
                let [intake, walking, both] = ctx.ctx.guidance.loss_options_offered();
                tidy::ReportOffers {
                    intake,
                    walking,
                    both,
                }
            },
        )));
        // Clinician follow-up list: this participant's flags, when the program turns it on.
        rec.followup = report::followup::for_participant(
            &plan.report_scope(),
            &data,
            &results,
            &loaded.diagnostics,
        );
    }
    staging.write(&partial::cache_path(&rec.id), &rec.to_bytes())?;
    Ok(rec)
}

/// Rows of `data` dated after `end` (the program's end), by file name; files without any are
/// left out.
fn rows_after(
    data: &cohortpress_metric_api::ParticipantData,
    end: chrono::NaiveDate,
) -> BTreeMap<String, usize> {
    let counts = [
        (
            "weights.csv",
            data.weights.iter().filter(|r| r.date > end).count(),
        ),
        (
            "intake.csv",
            data.intake.iter().filter(|r| r.date > end).count(),
        ),
        (
            "activity.csv",
            data.activity.iter().filter(|r| r.date > end).count(),
        ),
        (
            "sessions.csv",
            data.sessions.iter().filter(|r| r.date > end).count(),
        ),
        (
            "labs.csv",
            data.labs.iter().filter(|r| r.date > end).count(),
        ),
    ];
    counts
        .into_iter()
        .filter(|(_, n)| *n > 0)
        .map(|(f, n)| (f.to_string(), n))
        .collect()
}

/// The log's one line about rows dated after the program's end (`None` when there are none):
/// they are read (they count as rows read in `metrics/participants.csv`) but enter no figure,
/// since every period ends by the program's end. A sync that went on after the end, or a
/// participant's file merged from a later export, left them unmentioned in the log: the
/// administrator could not tell whether the last report counted them.
pub fn after_end_note(end: chrono::NaiveDate, records: &[ParticipantRecord]) -> Option<String> {
    let mut by_file: BTreeMap<&str, usize> = BTreeMap::new();
    let mut people = 0usize;
    for r in records.iter().filter(|r| !r.after_end.is_empty()) {
        people += 1;
        for (f, n) in &r.after_end {
            *by_file.entry(f.as_str()).or_default() += n;
        }
    }
    let total: usize = by_file.values().sum();
    (total > 0).then(|| {
        let files = by_file
            .iter()
            .map(|(f, n)| format!("{f} {n}"))
            .collect::<Vec<_>>()
            .join(", ");
        format!(
            "{total} row{} dated after the program's end ({end}) in the files of {people} \
             participant{} ({files}): read, but not used in any report or figure, which stop at \
             the period's end; program.yaml's `program.end` is the last day any report covers",
            if total == 1 { "" } else { "s" },
            if people == 1 { "" } else { "s" },
        )
    })
}

/// The de-identified summary row of one participant for the group step.
pub fn summary_row(
    plan: &RunPlan,
    data: &ParticipantData,
    results: &ModuleResults,
) -> ParticipantSummary {
    let v = results.views();
    let (trend, adherence, outcomes) =
        (v.trend.as_ref(), v.adherence.as_ref(), v.outcomes.as_ref());
    let period = plan.period;
    let withdrawn = data.profile.withdrew.is_some_and(|w| w <= period.to);
    let baseline_kg = outcomes
        .and_then(|o| o.baseline_weight_kg)
        .or_else(|| data.baseline_weight().map(|w| w.weight.kg()));
    let trend_series = trend.map(|t| &t.weight_trend);
    // Outcome weight: the current trend weight (the smoothed level on the last weigh-in day
    // of the period), if that weigh-in lies in the last 28 days of the period; otherwise the
    // outcome is missing (rule documented in docs/GUIDE.md).
    let last_weigh_in = data
        .weights
        .iter()
        .rev()
        .find(|w| w.date <= period.to)
        .map(|w| w.date);
    let current = trend.and_then(|t| t.current_weight_kg.value);
    let recent = last_weigh_in.is_some_and(|d| (period.to - d).num_days() < 28);
    let outcome_kg = if recent { current } else { None };
    let last_observed_kg = current.or_else(|| {
        data.weights
            .iter()
            .rev()
            .find(|w| w.date <= period.to)
            .map(|w| w.weight.kg())
    });
    // The outcomes module's trajectory (exported in tables.csv), so that the group report's
    // weekly means are those of the rows a researcher reads; the same rule, computed here,
    // when the program runs without that module.
    let weekly_change_percent = match (outcomes, trend_series, baseline_kg) {
        (Some(o), _, _) => o
            .trajectory
            .iter()
            .map(|r| (r.week, r.change_percent))
            .collect(),
        (None, Some(s), Some(b)) if b > 0.0 => s
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
    // Week w's value is the trend on its last day, enrolment + 7w + 6 (the outcomes module's
    // trajectory): how many weeks end in the period, and the week of the withdrawal day (0 for
    // a day before enrolment), from dates a reader of the group report may know.
    let weeks_in_period =
        Some((((period.to - data.profile.enrolled).num_days() + 1).max(0) / 7) as u32);
    let withdrew_week = data
        .profile
        .withdrew
        .filter(|&w| w <= period.to)
        .map(|w| ((w - data.profile.enrolled).num_days().max(0) / 7) as u32);
    let in_plateau = trend.and_then(|t| match t.status {
        Status::Plateau => Some(true),
        Status::InsufficientData | Status::Unclear => None,
        Status::Losing | Status::Regaining | Status::Stable => Some(false),
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
        weeks_in_period,
        withdrew_week,
        activity_minutes_per_week: adherence.and_then(|a| a.activity_minutes_per_week),
        weigh_ins_per_week: adherence.and_then(|a| a.weigh_ins_per_week),
        food_log_days_per_week: adherence.and_then(|a| a.food_log_days_per_week),
        attendance_percent: adherence.and_then(|a| a.attendance_to_date_percent),
        in_plateau,
        clinical_flags,
        pseudonym: None,
    }
}

/// The tidy metrics files, written into staging: the participants' metrics streamed from their
/// partial results (already in staging), then the data-quality list and the group statistics.
fn write_tidy(
    plan: &RunPlan,
    columns: &tidy::Columns,
    ids: &[String],
    staging: &Staging,
    diags: &[Diagnostic],
    group: Option<&group::GroupReport>,
) -> Result<(), tidy::TidyError> {
    let mut participants = staging.create("metrics/participants.csv")?;
    let mut json = staging.create("metrics/participants.json")?;
    let mut weekly = staging.create("metrics/weekly.csv")?;
    let mut tables = staging.create("metrics/tables.csv")?;
    let load = |id: &str| {
        let bytes = staging
            .read(&partial::cache_path(id))
            .map_err(|e| e.to_string())?;
        let rec = ParticipantRecord::from_bytes(&bytes)
            .ok_or_else(|| format!("cache/{id}.json: unreadable partial result"))?;
        // Weigh-ins that are another folder's leave the participant out of the group report
        // (`excluded` in `tally`), so the tidy row does not count them as started
        // or as a completer either: the columns say what the group report counts.
        let copy = rec
            .diagnostics()
            .iter()
            .any(participant::is_copy_of_another);
        Ok(rec.tidy.map(TidyRecord::into_tidy).map(|mut t| {
            if copy {
                t.started = false;
                t.completer = false;
            }
            t
        }))
    };
    tidy::render(
        plan.period,
        columns,
        &plan.modules.specs(),
        ids,
        &load,
        tidy::TidySinks {
            participants: &mut participants,
            json: &mut json,
            weekly: &mut weekly,
            tables: &mut tables,
        },
    )?;
    json.finish()?;
    participants.finish()?;
    weekly.finish()?;
    tables.finish()?;
    staging.write("metrics/data-quality.csv", &tidy::data_quality(diags)?)?;
    staging.write(
        "metrics/datapackage.json",
        &tidy::datapackage(
            columns,
            &plan.modules.specs(),
            &plan.run_info(),
            group.is_some(),
        )?,
    )?;
    if let Some(group) = group {
        staging.write("metrics/group.json", &tidy::group_json(group)?)?;
    }
    Ok(())
}

/// Characters the PDF's font cannot show, for a run-log warning: the first eight as
/// `` `王` U+738B ``, comma-separated.
fn glyph_list(missing: &[char]) -> String {
    missing
        .iter()
        .take(8)
        .map(|c| format!("`{c}` U+{:04X}", *c as u32))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The group report's printed figures (its sections, serialized), for
/// [`group::ledger::Ledger::figures_key`]: not the notes, methods or month-over-month table.
fn printed_figures(g: &group::GroupReport) -> Vec<u8> {
    serde_json::to_vec(&(&g.program, &g.splits)).unwrap_or_default()
}

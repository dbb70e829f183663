//! Running a [`ModuleSet`] for one participant.
//!
//! Modules run in `program.yaml` order; each sees the outputs of those before it. A failure is
//! contained: it is recorded for this participant and this module, and the later modules still
//! run — except those that require the failed one, which are recorded as skipped. A panic in a
//! built-in module is caught and recorded the same way, so one bad participant or one bad module
//! never ends a run.

use super::registry::ModuleSet;
use chrono::NaiveDate;
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_api::{ModuleContext, ModuleOutput, ParticipantData, Period, ProgramInfo};
use cohortpress_metric_energy::view::{EnergyFlag, EnergyView};
use serde::Serialize;
use std::collections::BTreeMap;
use std::panic::{AssertUnwindSafe, catch_unwind};

/// A module that produced nothing for one participant, and why.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ModuleFailure {
    /// Module id.
    pub module: String,
    /// What went wrong, in words a program administrator understands.
    pub message: String,
}

/// How an external module's failure is written in the outputs, ahead of the run log's full text.
const EXTERNAL: &str = "external module: ";

impl ModuleFailure {
    /// The failure as the outputs (the participant's report, the tidy metrics, the cache) write
    /// it. An external module's own words — its `error` message, its last line on standard
    /// error, a piece of its output — and the command's path can carry the machine's paths, user
    /// and host names (a Python traceback does), so for an external module only cohortpress's
    /// description of what happened is kept (`external module: reported an error`, `exited with
    /// status 3`, `did not finish within 30 s and was stopped`); the full text is in the run
    /// log. A built-in module's message is cohortpress's own and is kept whole.
    pub fn for_outputs(&self) -> String {
        let Some(rest) = self.message.strip_prefix(EXTERNAL) else {
            return self.message.clone();
        };
        let own = rest
            .split([':', ';', '('])
            .next()
            .unwrap_or("")
            .split_whitespace()
            .map(|w| {
                if w.contains(['/', '\\']) {
                    if w.starts_with('`') { "`…`" } else { "…" }
                } else {
                    w
                }
            })
            .collect::<Vec<_>>()
            .join(" ");
        format!("{EXTERNAL}{own} (the run log has the details)")
    }
}

/// What the modules produced for one participant.
#[derive(Debug, Clone, Default, PartialEq, Serialize)]
pub struct ModuleResults {
    /// Outputs of the modules that succeeded, by module id, in run order.
    pub outputs: Vec<(String, ModuleOutput)>,
    /// Modules that failed or were skipped for this participant, in run order.
    pub failures: Vec<ModuleFailure>,
    /// Flags seen at follow-up only, as (module id, flag code): raised on the records of
    /// someone who stopped the program, follow-up weigh-ins included, and not raised when the
    /// same module runs on their records up to the `withdrew` day ([`without_follow_up`]).
    /// They stay in `outputs` (a low BMI at follow-up still matters to a clinician); the
    /// report, the clinician follow-up list and the tidy metrics say they were seen after
    /// leaving. Empty for everyone else.
    pub follow_up_flags: Vec<(String, String)>,
}

impl ModuleResults {
    /// The output of module `id`, when it succeeded.
    pub fn output(&self, id: &str) -> Option<&ModuleOutput> {
        self.outputs.iter().find(|(m, _)| m == id).map(|(_, o)| o)
    }

    /// Whether flag `code` of module `module` was seen at follow-up only
    /// ([`ModuleResults::follow_up_flags`]).
    pub fn at_follow_up(&self, module: &str, code: &str) -> bool {
        self.follow_up_flags
            .iter()
            .any(|(m, c)| m == module && c == code)
    }
}

/// Modules that set logged food and activity against the weight trend (implied intake, the
/// share of intake not logged, total energy use from the trend): for someone who stopped the
/// program (`withdrawal_reason: stopped_program`) they are given the records up to the
/// `withdrew` day only, weigh-ins included, and the modules they need are run on the same,
/// since the logs end on that day while the follow-up weigh-ins run on. Every other module
/// sees the follow-up weigh-ins (the weight at the time point is an intention-to-treat outcome).
pub const PROGRAM_DAYS_ONLY: [&str; 1] = [EnergyView::MODULE];

/// The energy module's note for a window its weight trend does not cover, in the words of a
/// cut at the withdrawal day: its own words ("The weight trend does not cover enough of the
/// last 28 days") read oddly beside the follow-up weigh-ins the chart shows, which do cover
/// them (sample program, SG-002 stopped on 8 Sep 2026 and weighed in on 28–30 Sep).
fn logs_ended_note(left: NaiveDate) -> String {
    format!(
        "Food and activity logs end on {left}, the day of leaving the program, and the weight \
         after that day is from follow-up weigh-ins, which are not set against logs that had \
         ended; so the intake implied by the weight trend, the forecast and the options are not \
         computed for the end of this period."
    )
}

/// `data` with the weigh-ins after `withdrew` left out, when it has any up to `to`, the
/// period's end (only someone who stopped the program does: after withdrawn consent none is
/// read); `None` otherwise. Weigh-ins after the period's end do not count: the modules read
/// records up to it only, and a September report run on 31 Oct for someone who left on 8 Sep
/// and weighed in next on 8 Oct said "the weight after that day is from follow-up weigh-ins"
/// ([`logs_ended_note`]) where one run before 8 Oct said the trend did not cover the window.
pub fn without_follow_up(data: &ParticipantData, to: NaiveDate) -> Option<ParticipantData> {
    let left = data
        .profile
        .withdrew
        .filter(|_| data.profile.follow_up_weigh_ins())?;
    if !data.weights.iter().any(|w| w.date > left && w.date <= to) {
        return None;
    }
    let mut cut = data.clone();
    cut.weights.retain(|w| w.date <= left);
    Some(cut)
}

/// The days with a weigh-in up to `to`, sorted (with repeats), for [`seen_at_follow_up`].
pub fn weigh_in_days(data: &ParticipantData, to: NaiveDate) -> Vec<NaiveDate> {
    let mut days: Vec<NaiveDate> = data
        .weights
        .iter()
        .map(|w| w.date)
        .filter(|d| *d <= to)
        .collect();
    days.sort_unstable();
    days
}

/// For a level the weight trend first reached on `crossed` (a loss milestone), the day it was
/// seen at follow-up, when `crossed` is after `left` (the `withdrew` day of someone who stopped
/// the program): the first weigh-in on or after `crossed` (`weigh_in_days`, sorted), since
/// between leaving and a follow-up visit nobody weighed in and the trend's crossing day is a
/// point on a line drawn across the gap; `crossed` itself when no weigh-in follows. `None`
/// when it was reached in the program. The participant report and `metrics/tables.csv` both
/// date milestones seen at follow-up by it.
pub fn seen_at_follow_up(
    left: Option<NaiveDate>,
    weigh_in_days: &[NaiveDate],
    crossed: NaiveDate,
) -> Option<NaiveDate> {
    left.filter(|w| crossed > *w).map(|_| {
        weigh_in_days
            .get(weigh_in_days.partition_point(|&x| x < crossed))
            .copied()
            .unwrap_or(crossed)
    })
}

impl ModuleSet {
    /// Runs every module for one participant, in order. Never fails as a whole: each module's
    /// problem is a [`ModuleFailure`] in the result. When there are follow-up weigh-ins after
    /// the withdrawal day ([`without_follow_up`]) modules run a second time on the records up
    /// to that day: the results of the modules of [`PROGRAM_DAYS_ONLY`] are those of that
    /// second run (every module up to them runs on both), and a flag the second run does not
    /// raise was seen at follow-up only ([`ModuleResults::follow_up_flags`]); a module after
    /// them runs the second time only when it, or a module after it, raised a flag.
    pub fn run(
        &self,
        program: &ProgramInfo,
        period: Period,
        as_of: NaiveDate,
        data: &ParticipantData,
    ) -> ModuleResults {
        let cut = without_follow_up(data, period.to);
        let mut results = ModuleResults::default();
        // The same modules on the records up to the withdrawal day (only with follow-up
        // weigh-ins): the results of PROGRAM_DAYS_ONLY, and the flags raised without the
        // follow-up weigh-ins.
        let mut program_days = ModuleResults::default();
        // Up to the last module of PROGRAM_DAYS_ONLY every module runs on both: that module's
        // results are of the records up to the withdrawal day, after every module before it
        // on the same records (each module is given every earlier output, and an external
        // one may read any of them).
        let both = match &cut {
            Some(_) => self
                .entries
                .iter()
                .rposition(|e| PROGRAM_DAYS_ONLY.contains(&e.spec.id.as_str()))
                .map_or(0, |i| i + 1),
            None => 0,
        };
        for (i, entry) in self.entries.iter().enumerate() {
            let program_only = PROGRAM_DAYS_ONLY.contains(&entry.spec.id.as_str());
            let on_cut = cut
                .as_ref()
                .filter(|_| i < both)
                .map(|cut| self.run_one(entry, program, period, as_of, cut, &program_days));
            let outcome = match &on_cut {
                Some(o) if program_only => o.clone(),
                _ => self.run_one(entry, program, period, as_of, data, &results),
            };
            if let Some(o) = on_cut {
                program_days.push(&entry.spec.id, o);
            }
            results.push(&entry.spec.id, outcome);
        }
        // After it, the records up to the withdrawal day only tell which flags were seen at
        // follow-up only: a module whose run on all the records raised no flag has none to
        // tell, so it runs again only when a module after it does (which is given its output).
        // A program whose external module comes last and raises no flag ran it twice for
        // everyone who stopped the program and weighed in after.
        if let Some(cut) = &cut {
            let flagged = |e: &super::registry::Entry| {
                results
                    .output(&e.spec.id)
                    .is_some_and(|o| !o.flags.is_empty())
            };
            if let Some(last) = self
                .entries
                .iter()
                .rposition(flagged)
                .filter(|&l| l >= both)
            {
                for entry in &self.entries[both..=last] {
                    let o = self.run_one(entry, program, period, as_of, cut, &program_days);
                    program_days.push(&entry.spec.id, o);
                }
            }
        }
        if let Some(left) = cut.as_ref().and_then(|c| c.profile.withdrew) {
            let mut seen = Vec::new();
            for (module, out) in &mut results.outputs {
                let before = program_days.output(module);
                for f in &mut out.flags {
                    if PROGRAM_DAYS_ONLY.contains(&module.as_str()) {
                        if f.code == EnergyFlag::InsufficientData.as_str() {
                            f.message = logs_ended_note(left);
                        }
                        continue;
                    }
                    if !before.is_some_and(|b| b.flags.iter().any(|g| g.code == f.code)) {
                        seen.push((module.clone(), f.code.clone()));
                    }
                }
            }
            results.follow_up_flags = seen;
        }
        results
    }

    /// Runs one module on `data`, after the modules of `results`.
    pub(super) fn run_one(
        &self,
        entry: &super::registry::Entry,
        program: &ProgramInfo,
        period: Period,
        as_of: NaiveDate,
        data: &ParticipantData,
        results: &ModuleResults,
    ) -> Result<ModuleOutput, ModuleFailure> {
        let id = entry.spec.id.clone();
        if let Some(need) = entry
            .spec
            .requires
            .iter()
            .find(|need| results.output(need).is_none())
        {
            return Err(ModuleFailure {
                module: id,
                message: format!("skipped: needs {need}"),
            });
        }
        let ctx = ModuleContext {
            program: program.clone(),
            period,
            as_of,
            settings: entry.settings.clone(),
            earlier: results
                .outputs
                .iter()
                .map(|(m, o)| (m.clone(), o.clone()))
                .collect::<BTreeMap<_, _>>(),
        };
        // AssertUnwindSafe: the module gets shared references only, and after a panic we
        // drop its context and never look at its state again.
        let outcome = catch_unwind(AssertUnwindSafe(|| entry.module.compute(&ctx, data)));
        match outcome {
            Ok(Ok(output)) => Ok(output),
            Ok(Err(e)) => {
                if entry.command.is_some() {
                    // The outputs keep only cohortpress's words (`for_outputs`); the module's
                    // own are logged here, with whom they concern.
                    tracing::warn!(
                        participant = data.profile.id.as_str(),
                        module = id.as_str(),
                        "{}: module {id} failed: {}",
                        data.profile.id,
                        e.message.replace('\n', " |")
                    );
                }
                Err(ModuleFailure {
                    module: id,
                    message: e.message,
                })
            }
            Err(panic) => {
                let what = panic
                    .downcast_ref::<&str>()
                    .map(|s| s.to_string())
                    .or_else(|| panic.downcast_ref::<String>().cloned())
                    .unwrap_or_else(|| "no message".into());
                tracing::error!(
                    participant = data.profile.id.as_str(),
                    module = entry.spec.id.as_str(),
                    "module `{}` panicked for participant {}: {what}",
                    entry.spec.id,
                    data.profile.id
                );
                Err(ModuleFailure {
                    module: id,
                    message: format!("internal error in the module (it panicked: {what})"),
                })
            }
        }
    }
}

impl ModuleResults {
    /// Adds module `id`'s output or failure.
    fn push(&mut self, id: &str, outcome: Result<ModuleOutput, ModuleFailure>) {
        match outcome {
            Ok(output) => self.outputs.push((id.to_string(), output)),
            Err(f) => self.failures.push(f),
        }
    }
}

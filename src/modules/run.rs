//! Running a [`ModuleSet`] for one participant.
//!
//! Modules run in `program.yaml` order; each sees the outputs of those before it. A failure is
//! contained: it is recorded for this participant and this module, and the later modules still
//! run — except those that require the failed one, which are recorded as skipped. A panic in a
//! built-in module is caught and recorded the same way, so one bad participant or one bad module
//! never ends a run.

use super::registry::ModuleSet;
use chrono::NaiveDate;
use cohortpress_metric_api::{ModuleContext, ModuleOutput, ParticipantData, Period, ProgramInfo};
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
}

impl ModuleResults {
    /// The output of module `id`, when it succeeded.
    pub fn output(&self, id: &str) -> Option<&ModuleOutput> {
        self.outputs.iter().find(|(m, _)| m == id).map(|(_, o)| o)
    }
}

impl ModuleSet {
    /// Runs every module for one participant, in order. Never fails as a whole: each module's
    /// problem is a [`ModuleFailure`] in the result.
    pub fn run(
        &self,
        program: &ProgramInfo,
        period: Period,
        as_of: NaiveDate,
        data: &ParticipantData,
    ) -> ModuleResults {
        let mut results = ModuleResults::default();
        for entry in &self.entries {
            let id = entry.spec.id.clone();
            if let Some(need) = entry
                .spec
                .requires
                .iter()
                .find(|need| results.output(need).is_none())
            {
                results.failures.push(ModuleFailure {
                    module: id,
                    message: format!("skipped: needs {need}"),
                });
                continue;
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
                Ok(Ok(output)) => results.outputs.push((id, output)),
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
                    results.failures.push(ModuleFailure {
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
                    results.failures.push(ModuleFailure {
                        module: id,
                        message: format!("internal error in the module (it panicked: {what})"),
                    });
                }
            }
        }
        results
    }
}

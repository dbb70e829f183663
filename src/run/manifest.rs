//! The run manifest: what a run read and wrote, with checksums.

use super::{RunPlan, RunSummary};
use crate::output::{OutputFile, OutputScope, Staging};
use crate::participant::InputFile;
use serde::Serialize;

#[derive(Serialize)]
struct Manifest<'a> {
    tool: String,
    program_id: &'a str,
    /// blake3 of `program.yaml` as read: targets, guidance, privacy and module settings.
    program_yaml_blake3: &'a str,
    /// blake3 over the template override files (`built-in` without any).
    templates_blake3: &'a str,
    period_from: String,
    period_to: String,
    as_of: String,
    scope: OutputScope,
    formats: Vec<String>,
    modules: Vec<String>,
    counts: &'a RunSummary,
    inputs: &'a [InputFile],
    outputs: Vec<OutputFile>,
}

/// The run manifest (JSON): tool version, settings (with the hashes of `program.yaml` and the
/// template overrides), input hashes, every output with its
/// checksum, counts. It holds no clock time, so an unchanged re-run gives identical bytes.
pub fn manifest(
    plan: &RunPlan,
    inputs: &[InputFile],
    staging: &Staging,
    summary: &RunSummary,
) -> Result<Vec<u8>, serde_json::Error> {
    let m = Manifest {
        tool: format!("cohortpress {}", env!("CARGO_PKG_VERSION")),
        program_id: &plan.program.info.id,
        program_yaml_blake3: &plan.key.program_yaml,
        templates_blake3: &plan.key.templates,
        period_from: plan.period.from.to_string(),
        period_to: plan.period.to.to_string(),
        as_of: plan.as_of.to_string(),
        scope: plan.scope(),
        formats: plan
            .formats
            .iter()
            .map(|f| format!("{f:?}").to_lowercase())
            .collect(),
        modules: plan
            .modules
            .settings_fingerprint()
            .lines()
            .map(str::to_string)
            .collect(),
        counts: summary,
        inputs,
        outputs: staging.files(),
    };
    let mut v = serde_json::to_vec_pretty(&m)?;
    v.push(b'\n');
    Ok(v)
}

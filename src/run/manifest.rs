//! The run manifest: what a run read and wrote, with checksums.

use super::{RunPlan, RunSummary};
use crate::output::{OutputFile, OutputScope, Staging};
use crate::participant::InputFile;
use serde::Serialize;

#[derive(Serialize)]
struct Manifest<'a> {
    tool: String,
    program_id: String,
    /// blake3 of `program.yaml` as read: targets, guidance, privacy and module settings.
    program_yaml_blake3: String,
    /// blake3 over the template override files (`built-in` without any).
    templates_blake3: String,
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
    // The same values `metrics/datapackage.json` gives as its `run`.
    let info = plan.run_info();
    let m = Manifest {
        tool: info.tool,
        program_id: info.program_id,
        program_yaml_blake3: info.program_yaml_blake3,
        templates_blake3: info.templates_blake3,
        period_from: info.period_from,
        period_to: info.period_to,
        as_of: info.as_of,
        scope: plan.scope(),
        formats: plan
            .formats
            .iter()
            .map(|f| format!("{f:?}").to_lowercase())
            .collect(),
        modules: info.modules,
        counts: summary,
        inputs,
        outputs: staging.files(),
    };
    let mut v = serde_json::to_vec_pretty(&m)?;
    v.push(b'\n');
    Ok(v)
}

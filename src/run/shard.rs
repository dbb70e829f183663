//! Shards: `run --shard K/N` processes a stable subset of the participants, and `merge`
//! combines the shards' outputs into the complete output.
//!
//! A participant belongs to shard `1 + h mod N`, where `h` is the first 8 bytes (little-endian)
//! of the blake3 hash of their id. The assignment depends on the id alone, so adding or removing
//! a participant never moves anybody else to another shard.
//!
//! A shard's output folder holds the participant reports of its participants, their partial
//! results (`cache/ID.json`, see [`crate::run::partial`]) and `shard.json`, which names the shard,
//! the run's [`RunKey`], the program-level diagnostics and the participants it processed.
//! `merge` checks that the shards are 1…N of the same run, copies the reports and partial
//! results, and then builds the group report, tidy metrics and manifest exactly as a single run
//! does, so the merged folder equals a single run's byte for byte.

use super::partial::{self, DiagRecord, ParticipantRecord, RunKey};
use super::{Blame, MergeOptions, RunError, RunPlan, RunSummary, execute};
use crate::diag::Diagnostic;
use crate::participant;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};
use std::str::FromStr;

/// Name of the shard description inside a shard's output folder.
pub const SHARD_FILE: &str = "shard.json";
/// Version of `shard.json`.
pub const FORMAT: u32 = 1;
/// Most shards a run may be split into.
pub const MAX_SHARDS: u32 = 10_000;

/// `K/N`: shard K (1-based) of N.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct ShardSpec {
    /// This shard, 1 ≤ index ≤ count.
    pub index: u32,
    /// Number of shards.
    pub count: u32,
}

impl FromStr for ShardSpec {
    type Err = String;

    fn from_str(s: &str) -> Result<Self, String> {
        let bad = || format!("expected K/N with 1 ≤ K ≤ N ≤ {MAX_SHARDS}, e.g. 2/8; found `{s}`");
        let (k, n) = s.split_once('/').ok_or_else(bad)?;
        let index: u32 = k.trim().parse().map_err(|_| bad())?;
        let count: u32 = n.trim().parse().map_err(|_| bad())?;
        if index == 0 || index > count || count > MAX_SHARDS {
            return Err(bad());
        }
        Ok(ShardSpec { index, count })
    }
}

impl std::fmt::Display for ShardSpec {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}/{}", self.index, self.count)
    }
}

impl ShardSpec {
    /// Whether participant `id` belongs to this shard.
    pub fn contains(&self, id: &str) -> bool {
        shard_of(id, self.count) == self.index
    }
}

/// The shard (1-based) of participant `id` among `count` shards.
pub fn shard_of(id: &str, count: u32) -> u32 {
    let h = blake3::hash(id.as_bytes());
    let mut first = [0u8; 8];
    first.copy_from_slice(&h.as_bytes()[..8]);
    (u64::from_le_bytes(first) % u64::from(count.max(1))) as u32 + 1
}

/// `shard.json`: what a shard run did.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ShardFile {
    /// [`FORMAT`].
    pub format: u32,
    /// This shard, 1-based.
    pub shard: u32,
    /// Number of shards.
    pub of: u32,
    /// Program id.
    pub program_id: String,
    /// Everything the results depend on besides the participants' own files.
    pub key: RunKey,
    /// `--only` ids, if any (every shard must have the same).
    pub only: Vec<String>,
    /// Program-level diagnostics (participant discovery); the same in every shard.
    pub discovery: Vec<DiagRecord>,
    /// Ids of the participants processed, sorted.
    pub participants: Vec<String>,
    /// Every other file the shard wrote (path, blake3, size), as a manifest lists them: a
    /// later run replaces the folder only when it holds nothing else (see
    /// [`crate::output`]). Empty in shard files written before it was kept.
    #[serde(default)]
    pub outputs: Vec<crate::output::OutputFile>,
}

impl ShardFile {
    /// JSON bytes as written (pretty, trailing newline).
    pub fn to_bytes(&self) -> Vec<u8> {
        let mut v = serde_json::to_vec_pretty(self).expect("a shard file serialises");
        v.push(b'\n');
        v
    }
}

/// Default output folder of a shard: `OUT-shard-K-of-N` beside the program's output folder,
/// so shards sharing a file system never write over each other.
pub fn default_shard_out(out: &Path, shard: ShardSpec) -> PathBuf {
    let name = out
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_else(|| "reports".into());
    out.with_file_name(format!("{name}-shard-{}-of-{}", shard.index, shard.count))
}

fn merge_error(message: String) -> RunError {
    RunError::Invalid {
        by: Blame::CommandLine,
        diagnostics: vec![Diagnostic::error("merge", message)],
    }
}

/// Reads and checks every shard's `shard.json`: same run, same N, each of 1…N exactly once.
fn read_shards(dirs: &[PathBuf]) -> Result<Vec<ShardFile>, RunError> {
    let mut shards = Vec::new();
    for d in dirs {
        let path = d.join(SHARD_FILE);
        let bytes = crate::limits::read_input(&path).map_err(|e| {
            merge_error(format!(
                "cannot read {} ({e}); give the output folders of `run --shard K/N`",
                path.display()
            ))
        })?;
        let s: ShardFile = serde_json::from_slice(&bytes).map_err(|e| {
            merge_error(format!(
                "{}: not a usable shard description ({e})",
                path.display()
            ))
        })?;
        if s.format != FORMAT {
            return Err(merge_error(format!(
                "{}: shard format {} (this cohortpress reads format {FORMAT})",
                path.display(),
                s.format
            )));
        }
        shards.push(s);
    }
    let first = shards[0].clone();
    for (s, d) in shards.iter().zip(dirs) {
        if s.of != first.of || s.key != first.key || s.only != first.only {
            return Err(merge_error(format!(
                "{} is shard {}/{} of a different run than {} (shard {}/{}): program, settings, \
                 period, as-of date, formats or tool version differ; run every shard with the \
                 same options",
                d.display(),
                s.shard,
                s.of,
                dirs[0].display(),
                first.shard,
                first.of
            )));
        }
        if s.discovery != first.discovery {
            return Err(merge_error(format!(
                "{} saw a different set of participant folders than {}; run every shard on the \
                 same program folder",
                d.display(),
                dirs[0].display()
            )));
        }
    }
    let mut seen: Vec<u32> = shards.iter().map(|s| s.shard).collect();
    seen.sort_unstable();
    let expected: Vec<u32> = (1..=first.of).collect();
    if seen != expected {
        let missing: Vec<String> = expected
            .iter()
            .filter(|k| !seen.contains(k))
            .map(|k| format!("{k}/{}", first.of))
            .collect();
        let mut dup: Vec<String> = seen
            .windows(2)
            .filter(|w| w[0] == w[1])
            .map(|w| format!("{}/{}", w[0], first.of))
            .collect();
        dup.dedup();
        // Only what is wrong: "missing: [2/2], given twice: []" named an empty list.
        let mut wrong = Vec::new();
        if !missing.is_empty() {
            wrong.push(format!("missing: {}", missing.join(", ")));
        }
        if !dup.is_empty() {
            wrong.push(format!("given twice: {}", dup.join(", ")));
        }
        return Err(merge_error(format!(
            "every shard 1…{n} is needed exactly once; {}",
            wrong.join("; "),
            n = first.of
        )));
    }
    Ok(shards)
}

/// `merge`: checks the shards, plans the merged run and writes the complete output. Returns
/// the totals, the number of shards and the output folder.
pub fn merge_shards(opts: &MergeOptions) -> Result<(RunSummary, usize, PathBuf), RunError> {
    let shards = read_shards(&opts.shards)?;
    let key = shards[0].key.clone();
    let plan = super::plan::plan_for_merge(opts, &key, shards[0].only.clone())?;
    if plan.key != key {
        return Err(merge_error(
            "the program folder changed since the shards ran (program.yaml, templates, modules \
             or the cohortpress version differ); run the shards again"
                .into(),
        ));
    }
    // Merging into one of the shards would replace that shard's output with the merged one:
    // allowed by the output-folder rules (it is the tool's own), but never what was meant.
    let canon = |p: &Path| std::fs::canonicalize(p).unwrap_or_else(|_| p.to_path_buf());
    let out = canon(&plan.out_dir);
    if let Some(d) = opts.shards.iter().find(|d| canon(d) == out) {
        return Err(merge_error(format!(
            "--out {} is one of the shard folders being merged; merging there would replace that \
             shard's output: give another folder",
            d.display()
        )));
    }
    let summary = merge(&plan, &opts.shards, &shards)?;
    Ok((summary, shards.len(), plan.out_dir))
}

/// The shards must cover the participant folders as they are now, with the same files: a
/// folder added or removed since (a participant who joined, or who withdrew consent and whose
/// data were deleted), or a file changed, would otherwise make the merged output differ from
/// what a single run gives today, without a word. Returns the folders, by id.
fn participants_unchanged(
    plan: &RunPlan,
    shards: &[ShardFile],
) -> Result<std::collections::BTreeMap<String, participant::ParticipantDir>, RunError> {
    use std::collections::BTreeSet;
    let (now, _) = execute::select_participants(plan)?;
    let now_ids: BTreeSet<&str> = now.iter().map(|d| d.id.as_str()).collect();
    let ran: BTreeSet<&str> = shards
        .iter()
        .flat_map(|s| s.participants.iter().map(String::as_str))
        .collect();
    if now_ids != ran {
        let list = |a: &BTreeSet<&str>, b: &BTreeSet<&str>| {
            a.difference(b).copied().collect::<Vec<_>>().join(", ")
        };
        return Err(merge_error(format!(
            "the participant folders changed since the shards ran (in no shard: [{}]; in a \
             shard, but no longer in the program: [{}]); run the shards again",
            list(&now_ids, &ran),
            list(&ran, &now_ids)
        )));
    }
    Ok(now.into_iter().map(|d| (d.id.clone(), d)).collect())
}

/// A participant's folder listing and input files as its shard read them (see
/// [`participants_unchanged`]).
fn inputs_unchanged(
    plan: &RunPlan,
    dir: &participant::ParticipantDir,
    rec: &ParticipantRecord,
) -> Result<(), RunError> {
    let changed = if participant::open(dir).names() != rec.listing {
        Some("the list of files in the folder".to_string())
    } else {
        rec.files
            .iter()
            .find(|f| {
                crate::limits::read_input(&plan.program.root.join(&f.path))
                    .map_or(true, |b| blake3::hash(&b).to_hex().as_str() != f.blake3)
            })
            .map(|f| f.path.clone())
    };
    match changed {
        Some(what) => Err(merge_error(format!(
            "participant {}: {what} changed since the shards ran; run the shards again",
            dir.id
        ))),
        None => Ok(()),
    }
}

fn merge(plan: &RunPlan, dirs: &[PathBuf], shards: &[ShardFile]) -> Result<RunSummary, RunError> {
    plan.check_output()?;
    execute::check_ledger_folder(plan)?;
    let folders = participants_unchanged(plan, shards)?;
    let staging = plan.begin_staging()?;
    let key_hash = plan.key.hash();
    let mut records: Vec<ParticipantRecord> = Vec::new();
    let columns = std::sync::Mutex::new(crate::tidy::Columns::new(plan.modules.ids()));
    for (dir, shard) in dirs.iter().zip(shards) {
        for id in &shard.participants {
            let rel = partial::cache_path(id);
            let bytes = crate::limits::read_input(&dir.join(&rel))
                .map_err(|e| RunError::Output(format!("{}: {e}", dir.join(&rel).display())))?;
            // The partial result is what the group report and the tidy metrics are built from:
            // it must be the file its shard wrote, as the reports must be (below), or the merged
            // output silently differs from a whole run's.
            let written = shard
                .outputs
                .iter()
                .find(|f| f.path == rel)
                .map(|f| f.blake3.as_str());
            if written != Some(blake3::hash(&bytes).to_hex().as_str()) {
                return Err(RunError::Output(format!(
                    "{}: the file changed after its shard wrote it",
                    dir.join(&rel).display()
                )));
            }
            let rec = ParticipantRecord::from_bytes(&bytes)
                .filter(|r| &r.id == id && r.run_key == key_hash)
                .ok_or_else(|| {
                    RunError::Output(format!(
                        "{}: not a partial result of this run",
                        dir.join(&rel).display()
                    ))
                })?;
            if let Some(folder) = folders.get(id) {
                inputs_unchanged(plan, folder, &rec)?;
            }
            for f in &rec.reports {
                let b = crate::limits::read_input(&dir.join(&f.path)).map_err(|e| {
                    RunError::Output(format!("{}: {e}", dir.join(&f.path).display()))
                })?;
                if blake3::hash(&b).to_hex().as_str() != f.blake3 {
                    return Err(RunError::Output(format!(
                        "{}: the file changed after its shard wrote it",
                        dir.join(&f.path).display()
                    )));
                }
                staging.write(&f.path, &b)?;
            }
            staging.write(&rel, &bytes)?;
            let mut rec = rec;
            execute::keep_light(&mut rec, &columns);
            records.push(rec);
        }
    }
    records.sort_by(|a, b| a.id.cmp(&b.id));
    if let Some(w) = records.windows(2).find(|w| w[0].id == w[1].id) {
        return Err(RunError::Output(format!(
            "participant {} appears in two shards",
            w[0].id
        )));
    }
    let discovery: Vec<Diagnostic> = shards[0]
        .discovery
        .iter()
        .map(DiagRecord::to_diagnostic)
        .collect();
    let templates =
        crate::report::templates::load_checked(&plan.program).map_err(|d| RunError::Invalid {
            by: super::Blame::Program,
            diagnostics: vec![d],
        })?;
    let columns = columns
        .into_inner()
        .expect("no panics while holding the lock");
    let (summary, _timing) =
        execute::finish(plan, &templates, staging, &discovery, &records, &columns)?;
    Ok(summary)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_k_of_n() {
        assert_eq!(
            "2/8".parse::<ShardSpec>().unwrap(),
            ShardSpec { index: 2, count: 8 }
        );
        for bad in ["0/3", "4/3", "3", "a/b", "1/0", "1/10001"] {
            assert!(bad.parse::<ShardSpec>().is_err(), "{bad}");
        }
    }

    #[test]
    fn assignment_is_stable_and_covers_every_shard() {
        let ids: Vec<String> = (0..300).map(|i| format!("P-{i:04}")).collect();
        let mut counts = [0usize; 3];
        for id in &ids {
            let k = shard_of(id, 3);
            counts[k as usize - 1] += 1;
            // Exactly one shard contains each id.
            let owners = (1..=3)
                .filter(|&i| ShardSpec { index: i, count: 3 }.contains(id))
                .count();
            assert_eq!(owners, 1);
        }
        // A hash spreads 300 ids roughly evenly: every shard gets a fair share.
        assert!(counts.iter().all(|&c| c > 60), "{counts:?}");
        // The assignment depends on the id alone and is pinned: 1 + (first 8 bytes of the
        // blake3 hash of the id, little-endian) mod N, computed independently with the Python
        // `blake3` package 1.0.11 (`int.from_bytes(blake3(id).digest()[:8], "little") % n + 1`).
        assert_eq!(shard_of("P-0007", 3), 3);
        assert_eq!(shard_of("P-0007", 8), 7);
        assert_eq!(shard_of("SG-001", 3), 1);
        assert_eq!(shard_of("SG-049", 8), 8);
    }
}

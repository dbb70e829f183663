//! The demo-program generator: a complete, fictional program folder to try the tool on.
//!
//! [`generate`] writes `program.yaml` and `participants/*/` for "Steady Ground 2026", a six-month
//! workplace program of the invented employer Brackenridge Ceramics (sites Kiln Row, Harbour
//! Depot and North Office). Each participant's weight is simulated day by day from an energy
//! balance (see [`sim`]), and the records are derived from it the way real records differ from
//! the truth: irregular noisy weigh-ins, some in lb, under-reported and thinning food logs,
//! activity, sessions and labs. With [`DemoOptions::with_defects`] a fixed set of realistic input
//! errors is planted once each (listed in `sample-program/README.md`), so `cohortpress check`
//! has something to report.
//!
//! The output depends only on the options: the random numbers come from a hand-written
//! generator ([`rng`]) and every participant draws from its own stream, so the bundled
//! `sample-program/` can be compared with the generator byte for byte.

pub mod people;
pub mod rng;
pub mod sim;
pub mod write;

#[cfg(test)]
mod tests;

use rayon::prelude::*;
use sim::{Plan, Scenario};
use std::fs;
use std::io;
use std::path::Path;

/// What to generate.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct DemoOptions {
    /// Number of participants with a profile (ids `SG-001`, …).
    pub participants: usize,
    /// Seed of the random numbers; the same seed gives the same bytes.
    pub seed: u64,
    /// Plant the realistic input errors (and the folder without a profile), and add the two
    /// participants who show the cautions the rest never reach ([`sim::SHOWCASE`]: a fast
    /// loser and a 72-year-old, after the folder without a profile).
    pub with_defects: bool,
}

impl Default for DemoOptions {
    /// The bundled sample: 48 participants, seed 2026, defects planted.
    fn default() -> Self {
        DemoOptions {
            participants: 48,
            seed: 2026,
            with_defects: true,
        }
    }
}

/// What [`generate`] wrote.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct DemoSummary {
    /// Participants with a profile (the folder planted without one is not counted; the
    /// showcase participants are).
    pub participants: usize,
    /// Files written, program.yaml included.
    pub files: usize,
    /// Bytes written.
    pub bytes: u64,
}

/// Most participants a demo program may have (ten times the benchmark's largest program).
pub const MAX_DEMO_PARTICIPANTS: usize = 100_000;

/// Writes a demo program into `out`.
///
/// `out` may be missing, empty, or a previous demo program (its program.yaml starts with
/// [`write::MARKER`]); in the last case its `participants/` folder is replaced and every other
/// file (a README, templates, reports) is left alone. Any other non-empty folder is refused with
/// [`io::ErrorKind::AlreadyExists`], so the generator can never overwrite a real program; so is
/// a demo whose `participants/` holds anything the generator did not write there as it is
/// (a participant folder added, a file edited, a link).
///
/// # Errors
/// `InvalidInput` for zero participants or more than [`MAX_DEMO_PARTICIPANTS`], `AlreadyExists`
/// as above, and any I/O error.
pub fn generate(out: &Path, opts: &DemoOptions) -> io::Result<DemoSummary> {
    if opts.participants == 0 {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            "a demo program needs at least one participant",
        ));
    }
    // Every participant's plan is made before anything is written: a typo of a count
    // (100000000) held about 800 MB and ran for minutes before writing a file.
    if opts.participants > MAX_DEMO_PARTICIPANTS {
        return Err(io::Error::new(
            io::ErrorKind::InvalidInput,
            format!(
                "a demo program has at most {} participants, found {}",
                crate::diag::thousands(MAX_DEMO_PARTICIPANTS),
                crate::diag::thousands(opts.participants)
            ),
        ));
    }
    prepare_folder(out)?;
    let scenario = Scenario::steady_ground();
    let plans = sim::plan_cohort(opts.participants, opts.seed, opts.with_defects);

    // program.yaml first: if a later write fails, the folder is still recognised as ours and a
    // second attempt may overwrite it.
    let mut buf = Vec::with_capacity(4096);
    write::program_yaml(&mut buf, &scenario, opts);
    fs::write(out.join("program.yaml"), &buf)?;
    let mut files = 1;
    let mut bytes = buf.len() as u64;

    let participants = out.join("participants");
    fs::create_dir_all(&participants)?;
    let (f, b) = plans
        .par_iter()
        .map_init(
            || Vec::with_capacity(64 * 1024),
            |buf, plan| write_participant(&participants, plan, &scenario, opts.seed, buf),
        )
        .try_reduce(|| (0, 0), |a, b| Ok((a.0 + b.0, a.1 + b.1)))?;
    files += f;
    bytes += b;

    if opts.with_defects {
        // A folder someone started without ever returning a profile.
        let dir = participants.join(sim::participant_id(opts.participants));
        fs::create_dir(&dir)?;
        buf.clear();
        write::orphan_weights_csv(&mut buf, &scenario);
        fs::write(dir.join("weights.csv"), &buf)?;
        files += 1;
        bytes += buf.len() as u64;
    }
    Ok(DemoSummary {
        participants: plans.len(),
        files,
        bytes,
    })
}

/// Makes sure `out` may be written (see [`generate`]) and clears a previous demo's participants.
fn prepare_folder(out: &Path) -> io::Result<()> {
    let mut entries = match fs::read_dir(out) {
        Ok(entries) => entries,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return fs::create_dir_all(out),
        Err(e) => return Err(e),
    };
    if entries.next().is_none() {
        return Ok(());
    }
    // Only an unedited demo: its program.yaml is exactly what the options named on its first
    // line generate. A program started from the demo and made real (its own title, id or
    // targets) keeps its participants.
    let ours = crate::limits::read_input(&out.join("program.yaml"))
        .ok()
        .and_then(|bytes| {
            let text = String::from_utf8(bytes).ok()?;
            let opts = options_from_marker(text.lines().next()?)?;
            let mut fresh = Vec::new();
            write::program_yaml(&mut fresh, &Scenario::steady_ground(), &opts);
            (fresh == text.as_bytes()).then_some(opts)
        });
    let Some(previous) = ours else {
        return Err(io::Error::new(
            io::ErrorKind::AlreadyExists,
            format!(
                "refusing to write into `{}`: the folder is not empty and is not a demo program \
                 written by `cohortpress demo-program` (no generated program.yaml, or one that \
                 was edited since); hint: choose a new or empty folder",
                out.display()
            ),
        ));
    };
    // The participants/ folder is replaced as a whole, so it must hold only what the generator
    // wrote there: an unedited program.yaml says nothing of the folders beside it (real
    // participants put into the demo program, an edited weigh-in were deleted without a word).
    let old = out.join("participants");
    if let Some((paths, count)) = not_generated(&old, &previous)? {
        let more = if count > paths.len() {
            format!(" and {} more", count - paths.len())
        } else {
            String::new()
        };
        return Err(io::Error::new(
            io::ErrorKind::AlreadyExists,
            format!(
                "refusing to write into `{}`: it is a demo program, but its participants/ \
                 folder holds what the generator did not write there or what was changed since \
                 ({}{more}), and writing the demo again replaces the folder as a whole; hint: \
                 move them out, or choose a new or empty folder",
                out.display(),
                paths
                    .iter()
                    .map(|p| format!("`{}`", crate::diag::printable(p)))
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        ));
    }
    if fs::symlink_metadata(&old).is_ok() {
        fs::remove_dir_all(old)?;
    }
    Ok(())
}

/// The options a generated program.yaml's first line names:
/// `MARKER (seed S, N participants, with|without planted input errors).`
fn options_from_marker(line: &str) -> Option<DemoOptions> {
    let rest = line.strip_prefix(write::MARKER)?.strip_prefix(" (seed ")?;
    let (seed, rest) = rest.split_once(", ")?;
    let (n, rest) = rest.split_once(" participants, ")?;
    let with_defects = match rest {
        "with planted input errors)." => true,
        "without planted input errors)." => false,
        _ => return None,
    };
    Some(DemoOptions {
        participants: n.parse().ok()?,
        seed: seed.parse().ok()?,
        with_defects,
    })
}

/// Simulates one participant and writes its folder; returns (files, bytes).
fn write_participant(
    root: &Path,
    plan: &Plan,
    scenario: &Scenario,
    seed: u64,
    buf: &mut Vec<u8>,
) -> io::Result<(usize, u64)> {
    let dir = root.join(&plan.id);
    fs::create_dir(&dir)?;
    let mut count = 0;
    let mut bytes = 0;
    participant_files(plan, scenario, seed, buf, |name, content| {
        fs::write(dir.join(name), content)?;
        count += 1;
        bytes += content.len() as u64;
        Ok(())
    })?;
    Ok((count, bytes))
}

/// Simulates one participant and hands each file of its folder (name, bytes) to `file`, in
/// the order they are written; `buf` is reused for every file.
fn participant_files(
    plan: &Plan,
    scenario: &Scenario,
    seed: u64,
    buf: &mut Vec<u8>,
    mut file: impl FnMut(&str, &[u8]) -> io::Result<()>,
) -> io::Result<()> {
    let p = sim::simulate(plan, scenario, seed);
    type Writer = fn(&mut Vec<u8>, &sim::Simulated);
    let files: [(&str, Writer, bool); 6] = [
        ("profile.yaml", write::profile_yaml, true),
        ("weights.csv", write::weights_csv, !p.weights.is_empty()),
        ("intake.csv", write::intake_csv, !p.intake.is_empty()),
        ("activity.csv", write::activity_csv, !p.activity.is_empty()),
        ("sessions.csv", write::sessions_csv, !p.sessions.is_empty()),
        ("labs.csv", write::labs_csv, !p.labs.is_empty()),
    ];
    for (name, writer, wanted) in files {
        if !wanted {
            continue;
        }
        buf.clear();
        writer(buf, &p);
        file(name, &buf[..])?;
    }
    Ok(())
}

/// What `participants/` of a previous demo written with `opts` holds that the generator did not
/// write there, or that was changed since: a folder or file added (a real participant put into
/// the demo program, notes), a file edited, a link. Up to five such paths (relative to the
/// program folder, as `participants/…`) and how many there are in all; `None` when everything
/// in it is the generator's, byte for byte (files it wrote and that were deleted since, or
/// that a stopped run left cut short, are not missed: nothing is lost by writing them again).
fn not_generated(
    participants: &Path,
    opts: &DemoOptions,
) -> io::Result<Option<(Vec<String>, usize)>> {
    let meta = match fs::symlink_metadata(participants) {
        Ok(m) => m,
        Err(e) if e.kind() == io::ErrorKind::NotFound => return Ok(None),
        Err(e) => return Err(e),
    };
    if !meta.is_dir() {
        return Ok(Some((vec!["participants".to_string()], 1)));
    }
    let scenario = Scenario::steady_ground();
    let plans = sim::plan_cohort(opts.participants, opts.seed, opts.with_defects);
    let by_id: std::collections::HashMap<&str, &Plan> =
        plans.iter().map(|p| (p.id.as_str(), p)).collect();
    let orphan = opts
        .with_defects
        .then(|| sim::participant_id(opts.participants));
    let mut entries = Vec::new();
    for e in fs::read_dir(participants)? {
        entries.push(e?);
    }
    entries.sort_by_key(fs::DirEntry::file_name);
    // Per folder: the paths in it the generator did not write as they are.
    let found: Vec<Vec<String>> = entries
        .par_iter()
        .map_init(
            || Vec::with_capacity(64 * 1024),
            |buf, entry| -> io::Result<Vec<String>> {
                let name = entry.file_name().to_string_lossy().into_owned();
                let rel = format!("participants/{name}");
                let mut expected: Vec<(String, Vec<u8>)> = Vec::new();
                if let Some(plan) = by_id.get(name.as_str()) {
                    participant_files(plan, &scenario, opts.seed, buf, |f, bytes| {
                        expected.push((f.to_string(), bytes.to_vec()));
                        Ok(())
                    })?;
                } else if orphan.as_deref() == Some(name.as_str()) {
                    buf.clear();
                    write::orphan_weights_csv(buf, &scenario);
                    expected.push(("weights.csv".into(), buf.clone()));
                } else {
                    return Ok(vec![rel]);
                }
                if !entry.file_type()?.is_dir() {
                    return Ok(vec![rel]);
                }
                let mut odd = Vec::new();
                let mut files: Vec<fs::DirEntry> =
                    fs::read_dir(entry.path())?.collect::<io::Result<_>>()?;
                files.sort_by_key(fs::DirEntry::file_name);
                for f in files {
                    let fname = f.file_name().to_string_lossy().into_owned();
                    // The generator's bytes, or their start: a file a stopped run (Ctrl-C, a
                    // full disk) left cut short holds nothing that writing it again loses.
                    let same = f.file_type()?.is_file()
                        && expected.iter().any(|(n, bytes)| {
                            *n == fname
                                && crate::limits::read_input(&f.path())
                                    .is_ok_and(|b| bytes.starts_with(&b))
                        });
                    if !same {
                        odd.push(format!("{rel}/{fname}"));
                    }
                }
                Ok(odd)
            },
        )
        .collect::<io::Result<_>>()?;
    let all: Vec<String> = found.into_iter().flatten().collect();
    Ok((!all.is_empty()).then(|| (all.iter().take(5).cloned().collect(), all.len())))
}

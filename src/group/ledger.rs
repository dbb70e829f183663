//! The ledger: what earlier group reports published, kept so that each new report is audited
//! together with them (a sponsor keeps every monthly report and every re-issue).
//!
//! The ledger lives in a state folder of the user's choice (`--state DIR`; default: the
//! program's own, its output folder's name plus `.ledger` beside it, `reports.ledger`, whatever
//! `--out` says — never inside the program's inputs; see [`resolve_dir`]). It holds:
//! - `secret.key`: 32 random bytes created on first use. Person tokens are a keyed hash of a
//!   hash of the participant id, so the ledger names nobody and cannot be matched against ids
//!   without this key.
//! - `ledger.json`: one entry per release (program id, period, as-of date): every exact count it
//!   printed as the set of person tokens counted, every mean printed with its n as the list of
//!   (person token, value key) it sums — value keys are hashes, no value is stored —, every
//!   adherence median printed as the (person token, value key) it was taken over, and the
//!   whole program's headline figures as printed, for the month-over-month table, and a keyed
//!   hash of a fixed text ([`key_check`]) that tells whether `secret.key` is the key it was
//!   written with. A ledger with releases is never given a new key: a missing or different key
//!   is an error (under another key no earlier count would link to anyone).
//!
//! Writes replace the file atomically (temporary file, then rename). An identical release
//! (same period and the same published facts, e.g. a re-run) is recorded once. A run holds an
//! OS lock on `ledger.lock` from opening the ledger to recording its release, so runs into
//! different output folders that share a ledger take turns: each is audited against the other's
//! release, and neither overwrites the other's record (or the other's temporary file).

use std::io::{Read, Write};
use std::path::{Path, PathBuf};

use serde::{Deserialize, Serialize};

use super::{History, Published, ReleaseLine};

const LEDGER_FILE: &str = "ledger.json";
const KEY_FILE: &str = "secret.key";
const LOCK_FILE: &str = "ledger.lock";
/// No real size limit on the ledger's files: `ledger.json` grows with participants × figures ×
/// releases (about 45 kB a release for 48 participants), and a ledger is never refused for it.
const LEDGER_LIMIT: u64 = 1 << 40;
const FORMAT: u32 = 1;

/// One recorded release.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReleaseRecord {
    /// Program id.
    pub program: String,
    /// First day of the period.
    pub period_from: String,
    /// Last day of the period.
    pub period_to: String,
    /// The as-of date of the run.
    pub as_of: String,
    /// Headline figures as printed.
    pub headline: ReleaseLine,
    /// Exact counts: person tokens counted.
    pub counts: Vec<Vec<u64>>,
    /// The plain name of each count (aligned with `counts`; empty in older ledgers).
    #[serde(default)]
    pub count_labels: Vec<String>,
    /// Sums: (person token, value key) pairs.
    pub sums: Vec<Vec<(u64, u64)>>,
    /// Adherence medians: the values each was taken over, as (person token, value key) pairs.
    /// Empty in older ledgers (their medians were not recorded).
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub orders: Vec<Vec<(u64, u64)>>,
    /// The enrolled and the started people of each section a count was printed in (person
    /// tokens), and for each count (aligned with `counts`) the indices of its section's two.
    /// Empty in older ledgers: their counts are compared by their people only.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub scopes: Vec<Vec<u64>>,
    /// See `scopes`.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub count_scopes: Vec<Vec<usize>>,
    /// For each sum (aligned with `sums`), the figure it was printed as ("mean change in week
    /// 3", whatever the section). Empty in older ledgers.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub sum_labels: Vec<String>,
    /// For each sum (aligned with `sums`), the indices in `scopes` of the people who could
    /// have had a value in it (see [`super::History::sum_scopes`]). Empty in older ledgers:
    /// their sums are audited as sums only, and a mean printed again after who could have a
    /// value in it changed is not compared with them.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub sum_scopes: Vec<Vec<usize>>,
    /// A keyed hash of a fixed text under the key the tokens were made with (see
    /// [`key_check`]): tells a key that does not belong to the ledger. Empty in older ledgers.
    #[serde(default)]
    pub key_check: String,
    /// A keyed hash of every figure the group report printed, as printed (its sections:
    /// values, ranges, medians, week means and their n, what is withheld), see
    /// [`Ledger::figures_key`]. Empty in older ledgers: such a release is never taken as
    /// the same report ([`Ledger::issued`]).
    #[serde(default, skip_serializing_if = "String::is_empty")]
    pub figures: String,
    /// The consent withdrawals the run knew of, each a keyed hash of the participant's id and
    /// withdrawal day ([`Ledger::withdrawal_key`]): a withdrawal recorded in a profile after
    /// releases of periods past its day is told from one known in time
    /// ([`Ledger::released_before_withdrawal`]). Absent in older ledgers: such a release is
    /// never named as made without a withdrawal.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub withdrawals: Option<Vec<String>>,
}

impl ReleaseRecord {
    /// Whether `other` records the same release, whatever the as-of date of its run and the
    /// withdrawals it knew (see [`Ledger::record`]). Every field is named, so a field added
    /// later is compared or left out on purpose.
    fn same_but_as_of(&self, other: &ReleaseRecord) -> bool {
        let ReleaseRecord {
            program,
            period_from,
            period_to,
            as_of: _,
            headline,
            counts,
            count_labels,
            sums,
            orders,
            scopes,
            count_scopes,
            sum_labels,
            sum_scopes,
            key_check,
            figures,
            withdrawals: _,
        } = self;
        *program == other.program
            && *period_from == other.period_from
            && *period_to == other.period_to
            && *headline == other.headline
            && *counts == other.counts
            && *count_labels == other.count_labels
            && *sums == other.sums
            && *orders == other.orders
            && *scopes == other.scopes
            && *count_scopes == other.count_scopes
            && *sum_labels == other.sum_labels
            && *sum_scopes == other.sum_scopes
            && *key_check == other.key_check
            && *figures == other.figures
    }
}

/// What a key gives for a fixed text: stored with each release, so a `secret.key` restored
/// from another backup (or another program's) is told from the right one. It reveals nothing
/// of the key (a keyed hash, blake3).
pub fn key_check(secret: &[u8; 32]) -> String {
    blake3::keyed_hash(secret, b"cohortpress group ledger key check")
        .to_hex()
        .to_string()
}

#[derive(Debug, Default, Serialize, Deserialize)]
struct LedgerFile {
    format: u32,
    releases: Vec<ReleaseRecord>,
}

/// The state folder used when none is given: `<out>.ledger` beside the output folder.
pub fn default_dir(out_dir: &Path) -> PathBuf {
    // `--out .` (or `x/..`) has no name of its own until `.` and `..` are resolved against the
    // working folder: it gave `./reports.ledger`, inside the output folder itself.
    let resolved;
    let out_dir = match out_dir.components().next_back() {
        Some(std::path::Component::Normal(_)) => out_dir,
        _ => {
            let cwd = std::env::current_dir().unwrap_or_default();
            resolved = crate::program::load::lexical(&cwd.join(out_dir));
            resolved.as_path()
        }
    };
    // Byte for byte: a name that is not UTF-8 (`\xff`) was written `\u{fffd}`, so the ledger
    // was not `<out>.ledger`, and output folders differing there shared one.
    let mut name = out_dir
        .file_name()
        .map(std::ffi::OsStr::to_os_string)
        .unwrap_or_else(|| "reports".into());
    name.push(".ledger");
    out_dir.with_file_name(name)
}

/// Where [`resolve_dir`] found a run's ledger folder: what the run says about it, and how a
/// folder that cannot be used is explained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StateSource {
    /// Named: `--state DIR`, or `report.state_dir` of program.yaml.
    Named,
    /// A ledger that exists: the program's own, the output folder's, or the one beside it.
    Found,
    /// No ledger exists yet: the program's own place (`<program>/<report.out>.ledger`), made
    /// there so that every later run finds it whatever `--out` says.
    ProgramsNew,
    /// The run writes no group report (`--only`, a shard): no ledger is used or made.
    NoGroupReport,
}

/// The ledger folder of a run and where it was found: `--state DIR` when given (relative to
/// the working folder), else `report.state_dir` of program.yaml (relative to the program
/// folder), else the ledger that exists of, in this order: the program's own output folder
/// (`report.out`) — a run into another folder (`--out`: a re-issue, a preview, a folder per
/// month) is then audited against every release the program's runs recorded — the output
/// folder ([`default_dir`]), and the one ledger beside the output folder that records this
/// program's group reports (`--out reports/2026-06` after `reports/2026-05`, or `report.out`
/// edited each month). When none exists, the new ledger is the program's own, beside
/// `report.out` in the program folder, not beside `--out`: a new ledger beside each output
/// folder audited no report against the last (`--out /srv/2026-05/reports`, then
/// `/srv/2026-06/reports`, each in a parent of its own: a site of 15 in one release and a
/// team of 12 inside it in the next gave the mean of the other 3). Refused (with the reason)
/// when a named one would be inside the program's inputs or inside the output folder (or hold
/// it), when the program's new one would be inside the output folder, when the output folder
/// would be inside the one found, and when more than one ledger beside the output folder
/// records this program's group reports
/// (which of them to audit against is the user's to say). With `group_report` false (a run of
/// `--only` or a shard, which records nothing) nothing beside is looked for and no ledger of
/// the program's is named, so none is made.
pub fn resolve_dir(
    cli: Option<&Path>,
    program: &crate::program::Program,
    out_dir: &Path,
    group_report: bool,
) -> Result<(PathBuf, StateSource), String> {
    let cwd = std::env::current_dir().unwrap_or_default();
    let root = cwd.join(&program.root);
    let out = cwd.join(out_dir);
    let (dir, named_by) = match (cli, &program.def.report.state_dir) {
        (Some(d), _) => (cwd.join(d), "--state"),
        (None, Some(d)) => (root.join(d), "report.state_dir"),
        (None, None) => {
            let programs = default_dir(&root.join(&program.def.report.out));
            let has_ledger = |d: &Path| {
                std::fs::symlink_metadata(d.join(LEDGER_FILE)).is_ok_and(|m| m.is_file())
            };
            let own = default_dir(out_dir);
            let (chosen, source) = if has_ledger(&programs) {
                (programs, StateSource::Found)
            } else if has_ledger(&cwd.join(&own)) {
                return Ok((own, StateSource::Found));
            } else if !group_report {
                // A run that writes no group report (`--only`, a shard) records nothing, so
                // it neither looks for a ledger beside nor is stopped by two of them.
                return Ok((own, StateSource::NoGroupReport));
            } else {
                // One rule for every run without a ledger named: the program's releases are
                // audited together wherever they were found, never each against nothing.
                match ledgers_beside(&cwd.join(&own), &program.info.id).as_slice() {
                    [] => (programs, StateSource::ProgramsNew),
                    [one] => {
                        tracing::info!(
                            "group-report ledger {}: used for this report, as it records this \
                             program's earlier group reports and lies beside the output folder, \
                             which has no ledger of its own; this report is audited against them",
                            one.display()
                        );
                        (one.clone(), StateSource::Found)
                    }
                    many => {
                        return Err(format!(
                            "the output folder {} has no group-report ledger of its own, and \
                             beside it {} each record group reports of this program; name the \
                             one to audit this report against with --state (or \
                             report.state_dir): with a new ledger, a difference of two reports \
                             could give away a small group's figures",
                            out_dir.display(),
                            many.iter()
                                .map(|d| d.display().to_string())
                                .collect::<Vec<_>>()
                                .join(" and ")
                        ));
                    }
                }
            };
            // `--out reports.ledger/x`: the run would stage its output in the program's ledger
            // folder, fail there, and leave a lock file that made every later run refuse the
            // ledger (exit 6). (Every other place is judged by the output folder's own checks.)
            let lexical = crate::program::load::lexical;
            if lexical(&out).starts_with(lexical(&chosen)) {
                return Err(format!(
                    "--out {}: the output folder would be inside the program's ledger folder {}, \
                     which holds the ledger's files only; name an output folder outside it",
                    out_dir.display(),
                    chosen.display()
                ));
            }
            // A new ledger of the program's inside the output folder (`report.out` a full
            // path, `--out` its parent) would be replaced with the output by every run. (An
            // output folder that holds the program folder, or lies among its inputs, is
            // refused by the output folder's own checks, in their words and with their exit
            // code.)
            if source == StateSource::ProgramsNew
                && !lexical(&root).starts_with(lexical(&out))
                && lexical(&chosen).starts_with(lexical(&out))
            {
                return Err(format!(
                    "--out {}: no group-report ledger records this program yet, and its own \
                     ledger {} would be inside this output folder, which every run replaces; \
                     name an output folder that does not hold it, or a ledger folder with \
                     --state DIR (or report.state_dir)",
                    out_dir.display(),
                    chosen.display()
                ));
            }
            return Ok((chosen, source));
        }
    };
    match crate::program::load::state_dir_problem(
        &root,
        &dir,
        program.def.report.templates.as_deref(),
        &out,
    ) {
        Some(why) => Err(format!(
            "{named_by} {}: the ledger folder would be {why}",
            dir.display()
        )),
        None => Ok((dir, StateSource::Named)),
    }
}

fn io_err(path: &Path, e: impl std::fmt::Display) -> std::io::Error {
    std::io::Error::other(format!("{}: {e}", path.display()))
}

/// An opened ledger (the folder exists and has a key).
#[derive(Debug)]
pub struct Ledger {
    dir: PathBuf,
    /// The ledger's folder, opened once (after the lock was taken): its files are written
    /// and renamed relative to it, so a folder swapped for a link while a run goes on never
    /// has a `ledger.json` replaced where the link leads.
    folder: LedgerFolder,
    secret: [u8; 32],
    releases: Vec<ReleaseRecord>,
    new: bool,
    /// Held until the ledger is dropped (see the module documentation).
    _lock: std::fs::File,
}

/// `ledger.json`'s bytes read as a ledger of this format.
fn parse_ledger(path: &Path, bytes: &[u8]) -> std::io::Result<LedgerFile> {
    parse_ledger_why(bytes).map_err(|why| io_err(path, why))
}

/// [`parse_ledger`] with the reason alone (the caller names the file).
fn parse_ledger_why(bytes: &[u8]) -> Result<LedgerFile, String> {
    let f: LedgerFile = serde_json::from_slice(bytes).map_err(|e| e.to_string())?;
    if f.format != FORMAT {
        return Err(format!("format {} (expected {FORMAT})", f.format));
    }
    Ok(f)
}

/// Why a folder cannot hold the ledger: the file or folder at fault and the reason, in the
/// words a run stops with (`group-report ledger: PATH: WHY`).
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct FolderProblem {
    /// The ledger folder, or the file in it that is at fault (`ledger.json`).
    pub path: PathBuf,
    /// What is wrong and what to do.
    pub why: String,
}

impl From<FolderProblem> for std::io::Error {
    fn from(p: FolderProblem) -> Self {
        io_err(&p.path, p.why)
    }
}

/// Other ledger folders beside `dir` (named `*.ledger`, as [`default_dir`] names them) whose
/// `ledger.json` records a release of `program`, sorted: the ledger [`resolve_dir`] uses when
/// the output folder has none of its own (a folder per month, or `report.out` changed from one
/// month to the next, would otherwise give each month a new ledger, audited against nothing).
/// Nothing is locked or created; a folder that cannot be read, or whose `ledger.json` is a link
/// or not a regular file, is passed over.
pub fn ledgers_beside(dir: &Path, program: &str) -> Vec<PathBuf> {
    let (Some(parent), Some(own)) = (dir.parent(), dir.file_name()) else {
        return Vec::new();
    };
    ledgers_in(parent, Some(own), program)
}

/// The `*.ledger` folders in `folder` (but `except`) whose `ledger.json` records a release of
/// `program`, read as [`ledgers_beside`] reads them.
pub fn ledgers_in(folder: &Path, except: Option<&std::ffi::OsStr>, program: &str) -> Vec<PathBuf> {
    let Ok(entries) = std::fs::read_dir(folder) else {
        return Vec::new();
    };
    let mut found: Vec<PathBuf> = entries
        .flatten()
        .filter(|e| Some(e.file_name().as_os_str()) != except)
        .filter(|e| e.file_name().to_string_lossy().ends_with(".ledger"))
        .filter(|e| e.file_type().is_ok_and(|t| t.is_dir()))
        .map(|e| e.path())
        .filter(|d| {
            // As the ledger's own file is read: never through a link, regular files only (a
            // FIFO named ledger.json beside the output made every run wait forever).
            crate::limits::read_limited(&d.join(LEDGER_FILE), LEDGER_LIMIT)
                .ok()
                .and_then(|b| parse_ledger_why(&b).ok())
                .is_some_and(|f| f.releases.iter().any(|r| r.program == program))
        })
        .collect();
    found.sort();
    found
}

/// The releases `dir`'s `ledger.json` records, as (program, first day, last day), read as
/// [`ledgers_beside`] reads it: nothing locked or created, never through a link. `Some(empty)`
/// when the folder holds no `ledger.json` (a new ledger); `None` when one is there but does not
/// read (the run refuses that folder in its own words: [`Ledger::check_folder`]).
pub fn recorded_releases(dir: &Path) -> Option<Vec<(String, String, String)>> {
    let file = dir.join(LEDGER_FILE);
    if std::fs::symlink_metadata(&file).is_err() {
        return Some(Vec::new());
    }
    let f = crate::limits::read_limited(&file, LEDGER_LIMIT)
        .ok()
        .and_then(|b| parse_ledger_why(&b).ok())?;
    Some(
        f.releases
            .into_iter()
            .map(|r| (r.program, r.period_from, r.period_to))
            .collect(),
    )
}

impl Ledger {
    /// Whether `dir` can hold the ledger, checked without creating or locking anything, so a
    /// run can be refused when it starts rather than after every participant was computed (a
    /// `--state` naming a file failed only then, with "File exists (os error 17)"): a folder
    /// of its own (missing, or holding only the ledger's files) and, when there, a
    /// `ledger.json` that reads. [`Ledger::open`] checks it again under the lock. `check`
    /// reports the same problem ([`Ledger::folder_problem`]).
    pub fn check_folder(dir: &Path, source: StateSource) -> std::io::Result<()> {
        Self::folder_problem_of(dir, source).map_err(std::io::Error::from)
    }

    /// [`Ledger::folder_problem`] of the folder a run uses, found as [`resolve_dir`] says:
    /// the program's new ledger that cannot be made (a read-only program folder, a file in the
    /// way) says whose it would be and why it is made there. It is never made elsewhere
    /// instead: a ledger beside each `--out` audited no report against the last.
    pub fn folder_problem_of(dir: &Path, source: StateSource) -> Result<(), FolderProblem> {
        Self::folder_problem(dir).map_err(|mut p| {
            if source == StateSource::ProgramsNew {
                p.why = format!(
                    "{}; {} would be the program's own ledger, made beside report.out in the \
                     program folder as no ledger records this program yet, so that every later \
                     run finds it whatever --out says",
                    p.why,
                    dir.display()
                );
            }
            p
        })
    }

    /// [`Ledger::check_folder`] with the file at fault and the reason apart.
    pub fn folder_problem(dir: &Path) -> Result<(), FolderProblem> {
        let exists = Self::own_folder(dir)?;
        Self::writable(dir, exists)?;
        if !exists {
            return Ok(());
        }
        let ledger_path = dir.join(LEDGER_FILE);
        let problem = |why: String| FolderProblem {
            path: ledger_path.clone(),
            why,
        };
        match crate::limits::read_limited(&ledger_path, LEDGER_LIMIT) {
            Ok(bytes) => parse_ledger_why(&bytes).map(|_| ()).map_err(problem),
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
            Err(e) => Err(problem(e.to_string())),
        }
    }

    /// Refuses a ledger folder this process may not write (`access(2)` with `W_OK`: a read-only
    /// file system, or a folder of someone else's), or, when `dir` does not exist yet, the
    /// nearest existing folder it would be created in. A run computed every participant and
    /// then failed at the ledger's lock file ("Read-only file system"), and `check` said the
    /// program was fine.
    fn writable(dir: &Path, exists: bool) -> Result<(), FolderProblem> {
        #[cfg(unix)]
        {
            let target = if exists {
                Some(dir)
            } else {
                dir.ancestors()
                    .skip(1)
                    .map(|a| {
                        if a.as_os_str().is_empty() {
                            Path::new(".")
                        } else {
                            a
                        }
                    })
                    .find(|a| a.is_dir())
            };
            if let Some(target) = target
                && let Err(e) = rustix::fs::access(target, rustix::fs::Access::WRITE_OK)
            {
                return Err(FolderProblem {
                    path: target.to_path_buf(),
                    why: format!(
                        "cannot be written ({}); a run records each group report in the \
                         ledger before it publishes the report, so it would stop there; name a \
                         ledger folder this run can write with --state (or report.state_dir)",
                        std::io::Error::from(e)
                    ),
                });
            }
        }
        #[cfg(not(unix))]
        let _ = (dir, exists);
        Ok(())
    }

    /// Refuses `dir` unless it is missing (`Ok(false)`) or a folder that holds nothing but the
    /// ledger's own files (`Ok(true)`).
    fn own_folder(dir: &Path) -> Result<bool, FolderProblem> {
        let problem = |why: String| FolderProblem {
            path: dir.to_path_buf(),
            why,
        };
        match std::fs::metadata(dir) {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(false),
            Err(e) => return Err(problem(e.to_string())),
            Ok(m) if !m.is_dir() => {
                return Err(problem(format!(
                    "is {}, not a folder; the ledger needs a folder of its own (name a new \
                     one with --state or report.state_dir)",
                    crate::limits::kind_of(&m.file_type())
                )));
            }
            Ok(_) => {}
        }
        // A folder of its own: `--state ~` or `--state .` put the ledger's files among other
        // people's (and read any `ledger.json` found there as ours).
        let mut foreign: Vec<String> = std::fs::read_dir(dir)
            .map_err(|e| problem(e.to_string()))?
            .filter_map(Result::ok)
            .map(|e| e.file_name().to_string_lossy().into_owned())
            .filter(|n| {
                ![LEDGER_FILE, KEY_FILE, LOCK_FILE, "ledger.tmp", "secret.tmp"]
                    .contains(&n.as_str())
            })
            .collect();
        if !foreign.is_empty() {
            foreign.sort();
            let shown: Vec<String> = foreign.iter().take(5).map(|n| format!("`{n}`")).collect();
            return Err(problem(format!(
                "holds {}{} besides a ledger's files; the ledger needs a folder of its own \
                 (name a new one with --state or report.state_dir)",
                shown.join(", "),
                if foreign.len() > 5 {
                    format!(" and {} more", foreign.len() - 5)
                } else {
                    String::new()
                }
            )));
        }
        Ok(true)
    }

    /// Opens (creating if needed) the ledger in `dir`, waiting for another run that is using
    /// it.
    pub fn open(dir: &Path) -> std::io::Result<Ledger> {
        Self::own_folder(dir)?;
        // Owner-only, as the output folders are by default: the ledger holds the exact counts
        // behind every published figure (it was made 0755 from the umask).
        let mut folder = std::fs::DirBuilder::new();
        folder.recursive(true);
        #[cfg(unix)]
        std::os::unix::fs::DirBuilderExt::mode(&mut folder, 0o700);
        folder.create(dir).map_err(|e| io_err(dir, e))?;
        // Again now that it exists (another run may have made it, or put files in it, since).
        Self::own_folder(dir)?;
        let lock_path = dir.join(LOCK_FILE);
        let lock = crate::limits::open_lock_file(&lock_path).map_err(|e| io_err(&lock_path, e))?;
        match lock.try_lock() {
            Ok(()) => {}
            Err(std::fs::TryLockError::WouldBlock) => {
                tracing::info!(
                    "waiting for another run that is using the group-report ledger {}",
                    dir.display()
                );
                lock.lock().map_err(|e| io_err(&lock_path, e))?;
            }
            Err(std::fs::TryLockError::Error(e)) => return Err(io_err(&lock_path, e)),
        }
        let folder = LedgerFolder::open(dir)?;
        // The folder opened must be the one whose lock the run holds: one moved away and
        // replaced by a link (or another folder) while the run waited for another run's lock
        // would have had the key and the ledger made where the link leads, a folder never
        // checked to be a ledger's.
        if !folder.holds(LOCK_FILE, &lock)? {
            return Err(io_err(
                dir,
                "was replaced (by a link or another folder) while this run waited for its lock; \
                 nothing was written to it or to where it now leads; check what is there and run \
                 again",
            ));
        }
        let ledger_path = dir.join(LEDGER_FILE);
        let mut new = false;
        // Read like an input (no link followed, regular files only): a FIFO
        // planted under either name made the run wait for ever, a link to `/dev/zero` read
        // until memory ran out, and a link to another program's ledger was used as this one.
        let read = |p: &Path| crate::limits::read_limited(p, LEDGER_LIMIT);
        let releases = match read(&ledger_path) {
            Ok(bytes) => parse_ledger(&ledger_path, &bytes)?.releases,
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                new = true;
                Vec::new()
            }
            Err(e) => return Err(io_err(&ledger_path, e)),
        };
        let key_path = dir.join(KEY_FILE);
        let secret = match read(&key_path) {
            Ok(b) if b.len() == 32 => b.try_into().expect("32 bytes"),
            Ok(_) => return Err(io_err(&key_path, "not a 32-byte key")),
            // A ledger whose key is lost cannot link anyone to its releases: with a new key
            // every earlier count would look like other people, and the audit across releases
            // would pass anything while the report still listed them.
            Err(e) if e.kind() == std::io::ErrorKind::NotFound && !releases.is_empty() => {
                return Err(io_err(
                    &key_path,
                    format!(
                        "missing, while {} records {} earlier release{}: without its key they \
                         cannot be audited against; restore {KEY_FILE} from the backup taken \
                         with the ledger, or move the folder away to start a new ledger \
                         (then earlier reports are not audited against)",
                        LEDGER_FILE,
                        releases.len(),
                        if releases.len() == 1 { "" } else { "s" }
                    ),
                ));
            }
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
                let key = fresh_key();
                write_atomic(&folder, KEY_FILE, &key_path, &key)?;
                key
            }
            Err(e) => return Err(io_err(&key_path, e)),
        };
        let check = key_check(&secret);
        if let Some(r) = releases
            .iter()
            .find(|r| !r.key_check.is_empty() && r.key_check != check)
        {
            return Err(io_err(
                &key_path,
                format!(
                    "not the key {LEDGER_FILE} was written with (its release for {} to {} was \
                     recorded under another key): restore the {KEY_FILE} that was backed up \
                     with this {LEDGER_FILE}",
                    r.period_from, r.period_to
                ),
            ));
        }
        Ok(Ledger {
            dir: dir.to_path_buf(),
            folder,
            secret,
            releases,
            new,
            _lock: lock,
        })
    }

    /// Whether the ledger held no release file when opened (its first release is being made).
    pub fn is_new(&self) -> bool {
        self.new
    }

    /// Whether a release of `program` for the period `from` to `to` (ISO dates) is recorded.
    pub fn has_release(&self, program: &str, from: &str, to: &str) -> bool {
        self.releases
            .iter()
            .any(|r| r.program == program && r.period_from == from && r.period_to == to)
    }

    /// The ledger's folder.
    pub fn dir(&self) -> &Path {
        &self.dir
    }

    /// What every earlier release the ledger holds published, for the audit: also those of
    /// another `program.id`. A program renamed (`program.id` edited for a re-issue) keeps its
    /// people, its ledger and its sponsor, and its report was audited against none of its
    /// earlier releases. Person tokens depend on the participant id alone, so another
    /// program's people sharing the ledger only make the audit stricter.
    pub fn history(&self) -> History {
        self.history_of(|_| true)
    }

    /// What every release but those of `program` for the period `from` to `to` (ISO dates)
    /// published, or `None` when no release of that period is recorded: a run of a period
    /// already released is first audited without its earlier issues, and keeps that result
    /// when it is one of them ([`Ledger::issued`]).
    pub fn history_without_period(&self, program: &str, from: &str, to: &str) -> Option<History> {
        self.has_release(program, from, to).then(|| {
            self.history_of(|r| {
                !(r.program == program && r.period_from == from && r.period_to == to)
            })
        })
    }

    /// Whether a release of `program` for `from` to `to` published exactly `headline` and
    /// `published` (every exact count with the people it counted, every sum with its values):
    /// printing them again tells the sponsor nothing they have not had.
    pub fn issued(
        &self,
        program: &str,
        from: &str,
        to: &str,
        headline: &ReleaseLine,
        published: &Published,
        figures: &str,
    ) -> bool {
        self.releases.iter().any(|r| {
            r.program == program
                && r.period_from == from
                && r.period_to == to
                && !r.figures.is_empty()
                && r.figures == figures
                && r.headline == *headline
                && r.counts == published.counts
                && r.count_labels == published.count_labels
                && r.sums == published.sums
                && r.orders == published.orders
                && r.scopes == published.scopes
                && r.count_scopes == published.count_scopes
                && r.sum_labels == published.sum_labels
                && r.sum_scopes == published.sum_scopes
        })
    }

    /// A keyed hash (blake3, under the ledger's key) of the printed figures `json` (the group
    /// report's sections serialized): what [`Ledger::issued`] compares besides the published
    /// facts. Week means withheld by the weighted-mean audit, week n dropped by the band audit,
    /// ranges, medians and percentages are printed but are no published fact, and depend on
    /// the history the report was audited against.
    pub fn figures_key(&self, json: &[u8]) -> String {
        blake3::keyed_hash(&self.secret, json).to_hex().to_string()
    }

    fn history_of(&self, keep: impl Fn(&ReleaseRecord) -> bool) -> History {
        let mut h = History {
            secret: Some(self.secret),
            ..Default::default()
        };
        for r in self.releases.iter().filter(|r| keep(r)) {
            let n = r.counts.len();
            // A release of an older ledger (no names, or no sections) adds its counts with
            // empty names and no sections.
            let labels = if r.count_labels.len() == n {
                r.count_labels.clone()
            } else {
                vec![String::new(); n]
            };
            let in_scopes = |ix: &Vec<Vec<usize>>| ix.iter().flatten().all(|&i| i < r.scopes.len());
            let count_scopes = if r.count_scopes.len() == n && in_scopes(&r.count_scopes) {
                r.count_scopes.clone()
            } else {
                vec![Vec::new(); n]
            };
            // Sums of a ledger written before their sections were kept: no label, no people.
            let m = r.sums.len();
            let (sum_labels, sum_scopes) =
                if r.sum_labels.len() == m && r.sum_scopes.len() == m && in_scopes(&r.sum_scopes) {
                    (r.sum_labels.clone(), r.sum_scopes.clone())
                } else {
                    (vec![String::new(); m], vec![Vec::new(); m])
                };
            h.add(Published {
                sums: r.sums.clone(),
                orders: r.orders.clone(),
                counts: r.counts.clone(),
                count_labels: labels,
                scopes: r.scopes.clone(),
                count_scopes,
                sum_labels,
                sum_scopes,
            });
        }
        h
    }

    /// Headline lines of earlier periods of `program` (the latest issue of each period ending
    /// before `period_to`), oldest first.
    pub fn earlier_headlines(&self, program: &str, period_to: &str) -> Vec<ReleaseLine> {
        let mut by_period: std::collections::BTreeMap<(String, String), ReleaseLine> =
            Default::default();
        for r in self
            .releases
            .iter()
            .filter(|r| r.program == program && r.period_to.as_str() < period_to)
        {
            by_period.insert(
                (r.period_to.clone(), r.period_from.clone()),
                r.headline.clone(),
            );
        }
        by_period.into_values().collect()
    }

    /// The calendar months between `program`'s latest release of a whole calendar month
    /// before `from` and the month starting on `from` that have no release of their own, as
    /// their first days, oldest first; empty when `from` is not the first day of a month or
    /// no release of an earlier month is recorded. A cron line that did not run one month (the
    /// machine off on the 2nd, a month skipped by a wrong clock) left that month without
    /// participant reports or a group report, and no later run said so (a 12-month tryout
    /// lost November: the December run went from October's release to its own in silence).
    pub fn months_missed_before(
        &self,
        program: &str,
        from: chrono::NaiveDate,
    ) -> Vec<chrono::NaiveDate> {
        use chrono::{Datelike, Months, NaiveDate};
        if from.day() != 1 {
            return Vec::new();
        }
        // A release's month, when its period is one whole calendar month.
        let month_of = |r: &ReleaseRecord| -> Option<NaiveDate> {
            let f: NaiveDate = r.period_from.parse().ok()?;
            let t: NaiveDate = r.period_to.parse().ok()?;
            let next = f.checked_add_months(Months::new(1))?;
            (f.day() == 1 && t.succ_opt() == Some(next)).then_some(f)
        };
        let months: std::collections::BTreeSet<NaiveDate> = self
            .releases
            .iter()
            .filter(|r| r.program == program)
            .filter_map(month_of)
            .collect();
        let Some(&latest) = months.range(..from).next_back() else {
            return Vec::new();
        };
        let mut missed = Vec::new();
        let mut m = latest;
        while let Some(next) = m.checked_add_months(Months::new(1)) {
            if next >= from {
                break;
            }
            if !months.contains(&next) {
                missed.push(next);
            }
            m = next;
        }
        missed
    }

    /// A keyed hash (blake3, under the ledger's key) of a participant's id and the day they
    /// withdrew consent: what a release records of the withdrawals its run knew, naming no one.
    pub fn withdrawal_key(&self, id: &str, withdrew: &str) -> String {
        let text = format!("cohortpress consent withdrawal\0{id}\0{withdrew}");
        blake3::keyed_hash(&self.secret, text.as_bytes())
            .to_hex()
            .to_string()
    }

    /// The periods (`from`, `to`) of `program`'s releases that ended after `withdrew` and were
    /// made without this withdrawal (its [`Ledger::withdrawal_key`] `key`) since the last
    /// release that knew it, oldest first: the withdrawal was recorded after those reports were
    /// made, and they treated the person as still in the program. Empty once a release knows
    /// it (it is said once; a month made again later, before the withdrawal's day or after,
    /// does not bring it back), and for releases of older ledgers, which did not record what
    /// they knew. A release of a period that ended before `withdrew` does not hold it (the
    /// person was still in the program) and is no evidence either way.
    pub fn released_before_withdrawal(
        &self,
        program: &str,
        key: &str,
        withdrew: &str,
    ) -> Vec<(String, String)> {
        let ours: Vec<&ReleaseRecord> = self
            .releases
            .iter()
            .filter(|r| r.program == program)
            .collect();
        let knew = |r: &ReleaseRecord| r.withdrawals.as_ref().map(|w| w.iter().any(|k| k == key));
        let since = ours
            .iter()
            .rposition(|r| knew(r) == Some(true))
            .map_or(0, |i| i + 1);
        let mut periods: Vec<(String, String)> = ours[since..]
            .iter()
            .filter(|r| r.period_to.as_str() > withdrew && knew(r) == Some(false))
            .map(|r| (r.period_from.clone(), r.period_to.clone()))
            .collect();
        periods.sort();
        periods.dedup();
        periods
    }

    /// Records a release (once: an identical release is not added again) and saves.
    pub fn record(&mut self, mut release: ReleaseRecord) -> std::io::Result<()> {
        release.key_check = key_check(&self.secret);
        // A release that differs from a recorded one only in its as-of date tells the audit
        // nothing new: after a program's end every monthly run reprints its last month, and
        // each run added a copy (about 775 kB at 300 people, every month, for ever).
        if let Some(i) = self
            .releases
            .iter()
            .position(|r| r.same_but_as_of(&release))
        {
            if self.releases[i].withdrawals == release.withdrawals {
                return Ok(());
            }
            // The same figures from a run that knew other consent withdrawals (one recorded
            // since, or a release of an older ledger, which recorded none): still one release,
            // now the latest, with what this run knew, so that a withdrawal is said once
            // ([`Ledger::released_before_withdrawal`]).
            self.releases.remove(i);
        }
        self.releases.push(release);
        let f = LedgerFile {
            format: FORMAT,
            releases: std::mem::take(&mut self.releases),
        };
        let bytes = serde_json::to_vec(&f).map_err(|e| io_err(&self.dir, e))?;
        self.releases = f.releases;
        write_atomic(
            &self.folder,
            LEDGER_FILE,
            &self.dir.join(LEDGER_FILE),
            &bytes,
        )
    }
}

/// The ledger entry of a release.
pub fn release_record(
    program: &str,
    period_from: &str,
    period_to: &str,
    as_of: &str,
    headline: ReleaseLine,
    published: Published,
    figures: String,
) -> ReleaseRecord {
    ReleaseRecord {
        program: program.into(),
        period_from: period_from.into(),
        period_to: period_to.into(),
        as_of: as_of.into(),
        headline,
        counts: published.counts,
        count_labels: published.count_labels,
        sums: published.sums,
        orders: published.orders,
        scopes: published.scopes,
        count_scopes: published.count_scopes,
        sum_labels: published.sum_labels,
        sum_scopes: published.sum_scopes,
        key_check: String::new(),
        figures,
        withdrawals: None,
    }
}

fn fresh_key() -> [u8; 32] {
    let mut key = [0u8; 32];
    let from_os = std::fs::File::open("/dev/urandom").and_then(|mut f| f.read_exact(&mut key));
    if from_os.is_err() {
        // No OS random source: a hash of the time and process, still never stored elsewhere.
        let mut h = blake3::Hasher::new();
        h.update(format!("{:?}", std::time::SystemTime::now()).as_bytes());
        h.update(&std::process::id().to_le_bytes());
        key = *h.finalize().as_bytes();
    }
    key
}

/// Writes `bytes` to the file `name` of the ledger's `folder` (`path`, as the user knows it,
/// names it in errors) through a new temporary file beside it, in that folder's handle
/// ([`LedgerFolder`]) (owner-only from its creation, so the key is never readable by others even for a moment). A leftover temporary
/// file — or a link planted under its name — is removed first, never written through: the
/// file is created with `O_EXCL`, so no link is followed and nothing outside the folder is
/// overwritten.
///
/// An error names the file being saved (`ledger.json`, the name the user knows) and says it
/// was not changed: the temporary file's name alone read as if that were the ledger. A write
/// that fails removes the temporary file.
fn write_atomic(
    folder: &LedgerFolder,
    name: &str,
    path: &Path,
    bytes: &[u8],
) -> std::io::Result<()> {
    let through = Path::new(name)
        .with_extension("tmp")
        .to_string_lossy()
        .into_owned();
    let err = |e: std::io::Error| {
        io_err(
            path,
            format!("{e} (written through {through} beside it; the file was not changed)"),
        )
    };
    folder.remove(&through).map_err(err)?;
    let mut f = folder.create_owner_only(&through).map_err(err)?;
    // Once it is made, a write that fails (a full disk, a file-size limit) removes it: it was
    // left behind, empty or cut short, beside the ledger it had not replaced.
    let written = f
        .write_all(bytes)
        .and_then(|()| f.sync_all())
        .and_then(|()| {
            drop(f);
            folder.rename(&through, name)
        });
    if let Err(e) = written {
        let _ = folder.remove(&through);
        return Err(err(e));
    }
    Ok(())
}

/// The ledger's folder as its files are written: on unix a handle opened once (links at its
/// name followed then, as the user named it, never again), elsewhere its path.
#[derive(Debug)]
struct LedgerFolder {
    #[cfg(unix)]
    fd: std::os::fd::OwnedFd,
    #[cfg(not(unix))]
    dir: PathBuf,
}

impl LedgerFolder {
    fn open(dir: &Path) -> std::io::Result<LedgerFolder> {
        #[cfg(unix)]
        {
            use rustix::fs::{Mode, OFlags};
            let flags = OFlags::RDONLY | OFlags::DIRECTORY | OFlags::CLOEXEC;
            let fd = rustix::fs::open(dir, flags, Mode::empty()).map_err(|e| io_err(dir, e))?;
            Ok(LedgerFolder { fd })
        }
        #[cfg(not(unix))]
        Ok(LedgerFolder {
            dir: dir.to_path_buf(),
        })
    }

    /// Removes the file `name` (a link is removed, never followed); one that is not there is
    /// no error.
    fn remove(&self, name: &str) -> std::io::Result<()> {
        #[cfg(unix)]
        let removed: std::io::Result<()> =
            rustix::fs::unlinkat(&self.fd, name, rustix::fs::AtFlags::empty()).map_err(Into::into);
        #[cfg(not(unix))]
        let removed = std::fs::remove_file(self.dir.join(name));
        match removed {
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => Ok(()),
            other => other,
        }
    }

    /// Whether the file `name` in the folder is `file` (the same device and inode), never
    /// following a link at its name; elsewhere than unix, always.
    fn holds(&self, name: &str, file: &std::fs::File) -> std::io::Result<bool> {
        #[cfg(unix)]
        {
            use rustix::fs::{Mode, OFlags};
            use std::os::unix::fs::MetadataExt;
            let flags = OFlags::RDONLY | OFlags::NOFOLLOW | OFlags::NONBLOCK | OFlags::CLOEXEC;
            let here = match rustix::fs::openat(&self.fd, name, flags, Mode::empty()) {
                Ok(fd) => std::fs::File::from(fd).metadata()?,
                Err(_) => return Ok(false),
            };
            let held = file.metadata()?;
            Ok(here.dev() == held.dev() && here.ino() == held.ino())
        }
        #[cfg(not(unix))]
        {
            let _ = (name, file);
            Ok(true)
        }
    }

    /// Makes the new file `name`, owner-only from its creation; fails when anything, a link
    /// included, is at its name.
    fn create_owner_only(&self, name: &str) -> std::io::Result<std::fs::File> {
        #[cfg(unix)]
        {
            use rustix::fs::{Mode, OFlags};
            let flags =
                OFlags::WRONLY | OFlags::CREATE | OFlags::EXCL | OFlags::NOFOLLOW | OFlags::CLOEXEC;
            let fd = rustix::fs::openat(&self.fd, name, flags, Mode::from_raw_mode(0o600))?;
            Ok(std::fs::File::from(fd))
        }
        #[cfg(not(unix))]
        std::fs::File::options()
            .write(true)
            .create_new(true)
            .open(self.dir.join(name))
    }

    /// Renames `from` to `to`, both in the folder.
    fn rename(&self, from: &str, to: &str) -> std::io::Result<()> {
        #[cfg(unix)]
        {
            rustix::fs::renameat(&self.fd, from, &self.fd, to)?;
            Ok(())
        }
        #[cfg(not(unix))]
        std::fs::rename(self.dir.join(from), self.dir.join(to))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A release of September with nothing published.
    fn september() -> ReleaseRecord {
        release_record(
            "p",
            "2026-09-01",
            "2026-09-30",
            "2026-10-01",
            line(),
            Published::default(),
            String::new(),
        )
    }

    fn line() -> ReleaseLine {
        ReleaseLine {
            period: "2026-09-01 to 2026-09-30".into(),
            started: "40".into(),
            with_outcome: "38 (95 %)".into(),
            retained: None,
            mean_change: "-2.1 %".into(),
            reached_5: "9 (23 %)".into(),
        }
    }

    /// The ledger's files were saved by path (`ledger.tmp` renamed to `ledger.json`): a ledger
    /// folder swapped for a link while a run went on (attack24) would have had its release
    /// saved where the link leads, replacing the `ledger.json` found there, another program's
    /// say. Saves now go through the handle the run opened with the lock: the run's own folder
    /// gets the release wherever it was moved, and the folder the link leads to keeps its
    /// files as they were.
    #[cfg(unix)]
    #[test]
    fn a_ledger_folder_swapped_for_a_link_mid_run_never_has_a_file_replaced_where_it_leads() {
        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("state");
        let mut ledger = Ledger::open(&dir).unwrap();
        let other = tmp.path().join("other");
        std::fs::create_dir(&other).unwrap();
        std::fs::write(other.join(LEDGER_FILE), "another program's").unwrap();
        let moved = tmp.path().join("moved");
        std::fs::rename(&dir, &moved).unwrap();
        std::os::unix::fs::symlink(&other, &dir).unwrap();
        let release = september();
        ledger.record(release).unwrap();
        assert_eq!(
            std::fs::read_to_string(other.join(LEDGER_FILE)).unwrap(),
            "another program's"
        );
        let mut names: Vec<String> = std::fs::read_dir(&other)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(names, [LEDGER_FILE]);
        let saved = parse_ledger(&moved, &std::fs::read(moved.join(LEDGER_FILE)).unwrap()).unwrap();
        assert_eq!(saved.releases.len(), 1);
        assert_eq!(saved.releases[0].period_to, "2026-09-30");
    }
    /// The ledger's folder was opened for its handle after the lock was taken, by its name: a
    /// run that waited for another run's lock (minutes, for a large program) opened whatever
    /// was at that name by then. With the folder moved away and a link left in its place while
    /// it waited, the run made its key (and then its ledger) where the link led, in a folder
    /// that was never checked to be a ledger's. Now the handle is checked to hold the lock file
    /// the run locked; a folder replaced meanwhile stops the run, and nothing is made there.
    #[cfg(unix)]
    #[test]
    fn a_ledger_folder_swapped_for_a_link_while_the_run_waits_for_its_lock_is_refused() {
        use std::sync::Mutex;
        use tracing_subscriber::layer::{Context, SubscriberExt};

        /// At the run's "waiting for another run" line: swaps the folder for a link, then
        /// ends the other run (releases its lock).
        struct SwapWhileWaiting {
            holder: Mutex<Option<std::fs::File>>,
            dir: PathBuf,
            moved: PathBuf,
            other: PathBuf,
        }
        struct Message(String);
        impl tracing::field::Visit for Message {
            fn record_debug(&mut self, f: &tracing::field::Field, v: &dyn std::fmt::Debug) {
                if f.name() == "message" {
                    self.0 = format!("{v:?}");
                }
            }
        }
        impl<S: tracing::Subscriber> tracing_subscriber::Layer<S> for SwapWhileWaiting {
            fn on_event(&self, event: &tracing::Event<'_>, _: Context<'_, S>) {
                let mut m = Message(String::new());
                event.record(&mut m);
                if m.0.contains("waiting for another run")
                    && let Some(lock) = self.holder.lock().unwrap().take()
                {
                    std::fs::rename(&self.dir, &self.moved).unwrap();
                    std::os::unix::fs::symlink(&self.other, &self.dir).unwrap();
                    drop(lock);
                }
            }
        }

        let tmp = tempfile::tempdir().unwrap();
        let dir = tmp.path().join("state");
        drop(Ledger::open(&dir).unwrap());
        let other = tmp.path().join("other");
        std::fs::create_dir(&other).unwrap();
        std::fs::write(other.join("notes.txt"), "kept").unwrap();
        // Another run holds the lock.
        let holder = std::fs::File::options()
            .write(true)
            .open(dir.join(LOCK_FILE))
            .unwrap();
        holder.lock().unwrap();
        let swap = SwapWhileWaiting {
            holder: Mutex::new(Some(holder)),
            dir: dir.clone(),
            moved: tmp.path().join("moved"),
            other: other.clone(),
        };
        let subscriber = tracing_subscriber::registry().with(swap);
        let opened = tracing::subscriber::with_default(subscriber, || Ledger::open(&dir));
        let err = opened.expect_err("refused").to_string();
        assert!(err.contains("was replaced"), "{err}");
        assert!(err.contains("while this run waited for its lock"), "{err}");
        let mut names: Vec<String> = std::fs::read_dir(&other)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        names.sort();
        assert_eq!(names, ["notes.txt"]);
    }
    /// A ledger folder the user reaches through a link of their own (`--state` naming a link
    /// to a folder on another disk) is used as before: the link is followed as the run opens
    /// the folder, and the lock, the key and the ledger are all in the folder it leads to.
    #[cfg(unix)]
    #[test]
    fn a_ledger_folder_named_through_a_users_link_is_used() {
        let tmp = tempfile::tempdir().unwrap();
        let real = tmp.path().join("disk/state");
        std::fs::create_dir_all(&real).unwrap();
        let link = tmp.path().join("state");
        std::os::unix::fs::symlink(&real, &link).unwrap();
        let mut ledger = Ledger::open(&link).unwrap();
        let release = september();
        ledger.record(release).unwrap();
        drop(ledger);
        assert!(std::fs::symlink_metadata(&link).unwrap().is_symlink());
        let saved = parse_ledger(&real, &std::fs::read(real.join(LEDGER_FILE)).unwrap()).unwrap();
        assert_eq!(saved.releases.len(), 1);
        assert!(real.join(KEY_FILE).is_file());
        assert_eq!(Ledger::open(&link).unwrap().releases.len(), 1);
    }
}

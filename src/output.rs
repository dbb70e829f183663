//! Atomic output: a staging folder beside the output folder and a run lock. This module and
//! [`crate::run`] (through it) are the only code that writes output files; what goes into them
//! is made elsewhere, as bytes.
//!
//! A run writes everything into `.NAME.staging/` next to the output folder `NAME/`, then swaps
//! it into place with two renames (`NAME` → `.NAME.previous`, staging → `NAME`) and removes the
//! previous copy. A run killed before the swap leaves `NAME/` untouched; a run killed between the
//! two renames leaves `.NAME.previous/`, which the next run restores before it starts. The lock
//! is an OS advisory lock on `.NAME.lock` (`File::try_lock`), so a lock left by a crashed run
//! never blocks the next one: the OS releases it when the process dies.
//!
//! The output folder is owned: a run replaces only a folder that is empty or holds a
//! cohortpress output (its `manifest.json`, or a shard's `shard.json`), never the program
//! folder, a folder that contains it, or anything inside its `participants/`. Links are
//! resolved before any of this is decided, and the lock is taken on the resolved path, so two
//! names for one folder share one lock. A partial run (`--only`, `--shard`) never replaces a
//! complete output. Every file and folder is fsync'd before the swap, and a staging folder left
//! by a failed run is removed when the [`Staging`] value is dropped; a run interrupted by SIGINT
//! or SIGTERM removes its own before it ends ([`abandon_staging`]); one left by a killed run
//! (SIGKILL, a power cut) is removed by the next run into the same folder or into any other
//! folder beside it.

use serde::Serialize;
use std::fs::{self, File};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::sync::Mutex;

/// Why staging failed.
#[derive(Debug, thiserror::Error)]
pub enum StagingError {
    /// Another run holds the lock (message form).
    #[error("{0}")]
    Locked(String),
    /// The output folder may not be written by this run (foreign, the program folder, a
    /// complete output that a partial run would replace…): nothing was touched.
    #[error("{0}")]
    Refused(String),
    /// A partial run (`--only`, `--shard`) would replace a complete output: refused whoever
    /// named the folder, since what is wrong is the partial run's command line (it needs
    /// `--out DIR` of its own), not `report.out`. Nothing was touched.
    #[error("{0}")]
    Partial(String),
    /// An I/O error, with the path (and what a file-size limit means, when that was hit).
    #[error("{path}: {source}{}", io_hint(.source))]
    Io {
        /// The path.
        path: String,
        /// The error.
        source: std::io::Error,
    },
    /// A file of the output refused while it was being written into staging (a full disk, a
    /// file-size limit), named as the user knows it: the output folder's path and the file
    /// (the staging folder is removed when the run stops, so its name means nothing to them).
    #[error("{path}: {source}{}; {kept}", io_hint(.source))]
    Write {
        /// The output folder's path joined with the file's path inside it.
        path: String,
        /// The error.
        source: std::io::Error,
        /// What became of the output folder (left as it was).
        kept: String,
    },
}

/// Words added to an I/O error whose cause the OS text alone does not tell a user: a write
/// refused by a file-size limit (`EFBIG`; the binary turns the kernel's SIGXFSZ into this
/// error, see `src/main.rs`).
fn io_hint(e: &std::io::Error) -> &'static str {
    match e.kind() {
        std::io::ErrorKind::FileTooLarge => {
            " (a file-size limit was reached: `ulimit -f` in the shell or job that started the \
             run, or the largest file the file system holds; raise the limit or write the \
             output elsewhere)"
        }
        _ => "",
    }
}

fn io(path: &Path) -> impl FnOnce(std::io::Error) -> StagingError + '_ {
    move |source| StagingError::Io {
        path: path.display().to_string(),
        source,
    }
}

/// One file written into staging.
#[derive(Debug, Clone, Serialize, serde::Deserialize, PartialEq, Eq, PartialOrd, Ord)]
pub struct OutputFile {
    /// Path relative to the output folder.
    pub path: String,
    /// blake3 hash, hex.
    pub blake3: String,
    /// Size in bytes.
    pub bytes: u64,
}

/// Who may read the outputs. Reports hold health data, so the default is the owner alone.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub enum Access {
    /// Folders 0700, files 0600 (the default).
    #[default]
    Owner,
    /// Folders 0750, files 0640 (`--group-readable`): the owner's group may read.
    Group,
}

impl Access {
    /// Unix mode of folders.
    pub fn dir_mode(self) -> u32 {
        match self {
            Access::Owner => 0o700,
            Access::Group => 0o750,
        }
    }

    /// Unix mode of files.
    pub fn file_mode(self) -> u32 {
        match self {
            Access::Owner => 0o600,
            Access::Group => 0o640,
        }
    }
}

/// What a run puts in its output folder. A partial output never replaces a complete one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum OutputScope {
    /// Every participant of the program (`run`, `merge`).
    Complete,
    /// Only the participants named with `--only`.
    Only,
    /// One shard of a split run (`--shard K/N`), to be merged.
    Shard,
}

/// The output folder a run asks for, and what it must never touch.
#[derive(Debug, Clone)]
pub struct OutputTarget {
    /// The output folder as given (`--out`, or `report.out` relative to the program folder).
    pub dir: PathBuf,
    /// The program folder: neither it, nor a folder containing it, nor anything inside its
    /// `participants/` may be an output folder.
    pub program_root: PathBuf,
    /// The name of the participants folder inside the program folder (`participants`).
    pub participants_dir: &'static str,
    /// The program's id: an output of another program is never replaced (two programs given
    /// one output folder would each delete the other's reports, and a sponsor would find the
    /// other program's group report where theirs should be).
    pub program_id: String,
    /// The program's own templates folder (`report.templates`), also an input.
    pub templates: Option<PathBuf>,
    /// What the run writes.
    pub scope: OutputScope,
    /// How the user named the folder, for messages (`--out` or `report.out`).
    pub named_by: &'static str,
}

impl OutputTarget {
    /// Whether a run could write this folder (links resolved, nothing created or locked):
    /// what `check` says about `report.out`, so that `check` and `run` agree.
    pub fn check(&self) -> Result<(), StagingError> {
        let out = resolve_output(&self.dir, self.named_by)?;
        check_not_inputs(&out, self)?;
        check_replaceable(&out, self)
    }

    /// The folder a run of this target writes its lock file, staging folder and the new
    /// output in (the output folder's parent, or the nearest existing folder above it, where
    /// the run would create it) when this process may not write it (`access(2)` with `W_OK`: a
    /// read-only file system, or a folder of someone else's), with the reason. `check --out`
    /// on a read-only file system said ok, and the run stopped at its lock file with exit 6.
    pub fn write_problem(&self) -> Option<(PathBuf, std::io::Error)> {
        let out = resolve_output(&self.dir, self.named_by).ok()?;
        let parent = out
            .parent()
            .map(Path::to_path_buf)
            .unwrap_or_else(|| "/".into());
        let existing = parent.ancestors().find(|a| a.is_dir())?;
        #[cfg(unix)]
        if let Err(e) = rustix::fs::access(existing, rustix::fs::Access::WRITE_OK) {
            return Some((existing.to_path_buf(), e.into()));
        }
        #[cfg(not(unix))]
        let _ = existing;
        None
    }
}

/// A staging folder being filled; [`Staging::commit`] swaps it into place.
pub struct Staging {
    access: Access,
    final_dir: PathBuf,
    dir: PathBuf,
    /// The staging folder's identity when it was made ([`folder_id`]).
    staging_id: FolderId,
    /// The staging folder, opened once as it was made (never through a link): every file and
    /// folder of the output is made relative to it, so a `.NAME.staging` swapped for a link
    /// while the run goes on never has anything made where the link leads.
    #[cfg_attr(not(unix), allow(dead_code))]
    handle: StagingHandle,
    previous: PathBuf,
    written: Mutex<Vec<OutputFile>>,
    folders: Mutex<std::collections::BTreeSet<PathBuf>>,
    committed: bool,
    _lock: File,
}

/// Marks a staging folder as ours, so a leftover one is removed only if it is ours; removed
/// right after the swap.
const STAGING_MARKER: &str = ".cohortpress-staging";

/// The staging folders of this process not yet swapped into place nor removed, each with the
/// output folder it would replace, for [`abandon_staging`] to remove when the process is
/// interrupted (SIGINT, SIGTERM). The lock is held while a staging folder, or a folder or file
/// inside it, is created, across a commit's two renames, and while a failed run's staging
/// folder is removed, so that an interrupt removes a staging folder whole, never one that is
/// being swapped into place, and no worker thread makes a folder in it again afterwards.
/// Each entry is (staging folder, output folder, marker file that makes the staging folder
/// ours): a run's ([`STAGING_MARKER`]) or an import's ([`ImportStaging`]).
static LIVE_STAGING: Mutex<Vec<(PathBuf, PathBuf, &'static str)>> = Mutex::new(Vec::new());

fn live_staging() -> std::sync::MutexGuard<'static, Vec<(PathBuf, PathBuf, &'static str)>> {
    // A panic while holding the lock leaves the list itself consistent.
    LIVE_STAGING.lock().unwrap_or_else(|e| e.into_inner())
}

/// The output folders this process has put in place (a run's swap, an import's folders moved
/// into `participants/`), added under the lock of [`LIVE_STAGING`], so that an interrupt that
/// comes after can say so ([`abandon_staging`]): it said "an output not yet put in place leaves
/// the previous one as it was" of an output already in place.
static PLACED: Mutex<Vec<PathBuf>> = Mutex::new(Vec::new());

fn placed(output: &Path) {
    PLACED
        .lock()
        .unwrap_or_else(|e| e.into_inner())
        .push(output.to_path_buf());
}

/// What an interrupt found ([`abandon_staging`]).
#[derive(Debug)]
pub struct Interrupted {
    /// The staging folders still being written, and what became of each.
    pub abandoned: Vec<Abandoned>,
    /// The output folders already put in place by this process.
    pub placed: Vec<PathBuf>,
}

/// What [`abandon_staging`] did with one staging folder.
#[derive(Debug)]
pub struct Abandoned {
    /// The staging folder.
    pub staging: PathBuf,
    /// The output folder it would have replaced (left as it was).
    pub output: PathBuf,
    /// `Err` when it could not be removed (the next run into that folder, or beside it,
    /// removes it).
    pub removed: Result<(), String>,
}

/// For a process about to end on an interrupt (SIGINT, SIGTERM): removes the staging folders
/// of the runs still writing (their output folders were never touched), and keeps the lock of
/// the list for good, so that from then on no thread creates anything in staging or swaps it
/// into place. Call it only just before the process ends: any later write into staging waits
/// for ever.
///
/// Without it a run stopped by a scheduler left `.NAME.staging/` (part of the month's
/// identified reports) beside the output folder until the next run into that folder or beside
/// it, which with a folder per month could be weeks.
pub fn abandon_staging() -> Interrupted {
    let mut live = live_staging();
    let abandoned = live
        .drain(..)
        .map(|(staging, output, marker)| {
            let removed = remove_ours(&staging, marker).map_err(|e| e.to_string());
            Abandoned {
                staging,
                output,
                removed,
            }
        })
        .collect();
    // Read under the lock kept for good: nothing is put in place any more.
    let placed = PLACED.lock().unwrap_or_else(|e| e.into_inner()).clone();
    std::mem::forget(live);
    Interrupted { abandoned, placed }
}

/// The staging folder of a writer other than a run's [`Staging`] (`cohortpress import fhir`
/// writes participant folders into `PROGRAM/.cohortpress-import.staging/` and moves them into
/// `PROGRAM/participants/`), registered like a run's so that an interrupt (SIGINT, SIGTERM)
/// removes it ([`abandon_staging`]): an import stopped by a scheduler or a Ctrl-C left it in
/// the program folder until the next import.
///
/// [`ImportStaging::create`] makes the folder and its marker file and registers it;
/// [`ImportStaging::hold`] is held while anything is made inside it or moved out of it, so an
/// interrupt removes it whole and nothing is made in it afterwards; [`ImportStaging::remove`]
/// (or dropping it) removes it and takes it off the list.
#[derive(Debug)]
pub struct ImportStaging {
    dir: PathBuf,
    marker: &'static str,
}

impl ImportStaging {
    /// Makes `dir` and the empty file `marker` in it (with the process's default access) and
    /// registers it, with `output` the folder its contents are moved into. `dir` must not
    /// exist.
    pub fn create(
        dir: &Path,
        output: &Path,
        marker: &'static str,
    ) -> std::io::Result<ImportStaging> {
        let mut live = live_staging();
        fs::create_dir(dir)?;
        let staging = ImportStaging {
            dir: dir.to_path_buf(),
            marker,
        };
        live.push((dir.to_path_buf(), output.to_path_buf(), marker));
        // From here on dropping `staging` removes the folder; the lock is let go first.
        drop(live);
        fs::write(dir.join(marker), "")?;
        Ok(staging)
    }

    /// The lock of the list of staging folders: hold it while making anything in the folder
    /// or moving anything out of it. After an interrupt it is never let go, and the process
    /// ends while the caller waits for it.
    pub fn hold(&self) -> LiveHold {
        LiveHold {
            _guard: live_staging(),
        }
    }

    /// Runs `move_out` (the renames that put the staged folders in place), then removes the
    /// folder (what is left in it) and takes it off the list, all under the lock: an interrupt
    /// comes before the first rename (nothing was moved) or after the folder is gone, so what
    /// it says it left as it was was left as it was. The folder is removed, and `Err` returned,
    /// when `move_out` fails too.
    pub fn finish(mut self, move_out: impl FnOnce() -> std::io::Result<()>) -> Result<(), String> {
        let mut live = live_staging();
        let moved = move_out().map_err(|e| e.to_string());
        if moved.is_ok()
            && let Some((_, output, _)) = live.iter().find(|(d, ..)| *d == self.dir)
        {
            placed(output);
        }
        let removed = self.remove_locked(&mut live).map_err(|e| e.to_string());
        moved.and(removed)
    }

    fn remove_registered(&mut self) -> Result<(), StagingError> {
        let mut live = live_staging();
        self.remove_locked(&mut live)
    }

    fn remove_locked(
        &mut self,
        live: &mut Vec<(PathBuf, PathBuf, &'static str)>,
    ) -> Result<(), StagingError> {
        let Some(i) = live.iter().position(|(d, ..)| *d == self.dir) else {
            // Removed already.
            return Ok(());
        };
        let removed = remove_ours(&self.dir, self.marker);
        live.remove(i);
        removed
    }
}

/// The lock of the list of staging folders, held ([`ImportStaging::hold`]).
pub struct LiveHold {
    _guard: std::sync::MutexGuard<'static, Vec<(PathBuf, PathBuf, &'static str)>>,
}

impl Drop for ImportStaging {
    fn drop(&mut self) {
        let _ = self.remove_registered();
    }
}

/// A file being written into staging; [`StagingFile::finish`] flushes it and records it for
/// the manifest.
pub struct StagingFile<'a> {
    staging: &'a Staging,
    rel: String,
    out: std::io::BufWriter<File>,
    hasher: blake3::Hasher,
    bytes: u64,
}

impl Write for StagingFile<'_> {
    fn write(&mut self, buf: &[u8]) -> std::io::Result<usize> {
        let n = self.out.write(buf).map_err(|e| self.located(e))?;
        self.hasher.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.out.flush().map_err(|e| self.located(e))
    }
}

impl StagingFile<'_> {
    /// `e` (a write of this file refused: a full disk, a file-size limit) with the file's
    /// path in front, as [`StagingError::Io`] says it: the writers that stream into the file
    /// pass the error on as it is, and the run's message named no file.
    fn located(&self, e: std::io::Error) -> std::io::Error {
        std::io::Error::new(
            e.kind(),
            self.staging.write_failed(&self.rel, e).to_string(),
        )
    }

    /// Writes all of `bytes`; an error is [`StagingError::Write`] with the file's path (once).
    fn write_whole(&mut self, bytes: &[u8]) -> Result<(), StagingError> {
        self.out
            .write_all(bytes)
            .map_err(|source| self.staging.write_failed(&self.rel, source))?;
        self.hasher.update(bytes);
        self.bytes += bytes.len() as u64;
        Ok(())
    }

    /// Flushes the file (made durable by the commit, see above) and records it (path, blake3, size) among the staged
    /// outputs.
    pub fn finish(mut self) -> Result<OutputFile, StagingError> {
        let (staging, rel) = (self.staging, self.rel.clone());
        let err = |source| staging.write_failed(&rel, source);
        self.out.flush().map_err(err)?;
        // On Linux one syncfs at commit makes every staged file durable at once (a fdatasync per
        // file cost about 4 ms each here, minutes for a large program); elsewhere each file is
        // synced as it is finished.
        #[cfg(not(target_os = "linux"))]
        self.out.get_ref().sync_data().map_err(err)?;
        let entry = OutputFile {
            path: self.rel,
            blake3: self.hasher.finalize().to_hex().to_string(),
            bytes: self.bytes,
        };
        self.staging
            .written
            .lock()
            .expect("no panics while holding the lock")
            .push(entry.clone());
        Ok(entry)
    }
}

/// What a commit put in place.
#[derive(Debug, Clone)]
pub struct OutputSet {
    /// Number of files.
    pub files: usize,
}

/// What an existing folder holds, as far as ownership goes.
#[derive(Debug, Clone, PartialEq, Eq)]
enum Existing {
    /// Nothing: any run may write it.
    Empty,
    /// A cohortpress output of this scope, of the program with this id (when it says).
    Ours(OutputScope, Option<String>),
}

/// Reads what `dir` (an existing folder) holds: empty, one of our outputs, or something else
/// (`Err` with what was found).
fn existing_output(dir: &Path) -> Result<Existing, String> {
    let mut entries = fs::read_dir(dir).map_err(|e| format!("cannot list it ({e})"))?;
    if entries.next().is_none() {
        return Ok(Existing::Empty);
    }
    let json = |name: &str| -> Option<serde_json::Value> {
        let f = dir.join(name);
        // The marker must be a plain file, not a link planted to look like one.
        let meta = fs::symlink_metadata(&f).ok()?;
        if !meta.is_file() || meta.len() > 64 << 20 {
            return None;
        }
        serde_json::from_slice(&fs::read(&f).ok()?).ok()
    };
    if let Some(m) = json("manifest.json")
        && m["tool"]
            .as_str()
            .is_some_and(|t| t.starts_with("cohortpress "))
        && m["outputs"].is_array()
    {
        let scope = match m["scope"].as_str() {
            Some("only") => OutputScope::Only,
            Some("shard") => OutputScope::Shard,
            _ => OutputScope::Complete,
        };
        if let Some(found) = unlisted_files(dir, MANIFEST, &listed_paths(&m["outputs"])) {
            return Err(found);
        }
        return Ok(Existing::Ours(
            scope,
            m["program_id"].as_str().map(str::to_string),
        ));
    }
    if let Some(s) = json(SHARD_MARKER)
        && s["format"].is_u64()
        && s["shard"].is_u64()
        && s["key"]["tool"]
            .as_str()
            .is_some_and(|t| t.starts_with("cohortpress "))
    {
        // A shard's folder is checked like an output with a manifest: a `shard.json` copied
        // into a home folder (to read it) made the whole folder "ours", and a run with
        // `--out` there deleted everything in it; so did a re-run of a shard over files put
        // in its folder since (notes, a job's log). Shard files written before the list of
        // outputs was kept list their participants, whose files are known.
        let listed = match s["outputs"].as_array() {
            Some(_) => listed_paths(&s["outputs"]),
            None => s["participants"]
                .as_array()
                .into_iter()
                .flatten()
                .filter_map(|id| id.as_str())
                .flat_map(|id| {
                    [
                        format!("participants/{id}.html"),
                        format!("participants/{id}.pdf"),
                        format!("cache/{id}.json"),
                    ]
                })
                .collect(),
        };
        if let Some(found) = unlisted_files(dir, SHARD_MARKER, &listed) {
            return Err(found);
        }
        return Ok(Existing::Ours(
            OutputScope::Shard,
            s["program_id"].as_str().map(str::to_string),
        ));
    }
    Err("it is not empty and holds no cohortpress manifest.json".into())
}

/// The file that makes a shard's output folder recognisably ours (`run --shard`).
const SHARD_MARKER: &str = "shard.json";

/// The `path` of each entry of a manifest's (or shard file's) `outputs` array.
fn listed_paths(outputs: &serde_json::Value) -> std::collections::HashSet<String> {
    outputs
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|o| o["path"].as_str().map(str::to_string))
        .collect()
}

/// The end of the message about files in an output that its manifest does not list.
const UNLISTED_ADVICE: &str =
    "a run replaces the folder as a whole and would delete them: move them out of the folder";

/// Files a file manager leaves in any folder it shows (Finder, Explorer, Dolphin): nothing of
/// anyone's is lost when they go with the folder.
fn is_folder_litter(name: &str) -> bool {
    matches!(
        name,
        ".DS_Store" | "Thumbs.db" | "desktop.ini" | ".directory"
    ) || name.starts_with("._")
}

/// What an earlier output holds that its manifest does not list: files someone put there (last
/// month's group report kept in an `archive/` folder, notes) or links. A run replaces the folder
/// as a whole, so they would be deleted with it; `Some` names them. Folders count by what they
/// hold (an empty one holds nothing to lose); the marker itself (`manifest.json`, or a shard's
/// `shard.json`), a staging marker left by a run stopped at its very end, and file managers'
/// litter are not counted.
fn unlisted_files(
    dir: &Path,
    marker: &str,
    listed: &std::collections::HashSet<String>,
) -> Option<String> {
    let mut found = Vec::new();
    let mut count = 0usize;
    for entry in walkdir::WalkDir::new(dir)
        .min_depth(1)
        .follow_links(false)
        .sort_by_file_name()
    {
        let (rel, unlisted) = match &entry {
            Ok(e) => {
                // The manifest's form: components joined by `/` (a `\` in a name stays).
                let rel = e
                    .path()
                    .strip_prefix(dir)
                    .unwrap_or(e.path())
                    .components()
                    .map(|c| c.as_os_str().to_string_lossy())
                    .collect::<Vec<_>>()
                    .join("/");
                let name = e.file_name().to_string_lossy();
                let ours = e.file_type().is_dir()
                    || (e.depth() == 1 && (name == marker || name == STAGING_MARKER))
                    || listed.contains(rel.as_str())
                    || (e.file_type().is_file() && is_folder_litter(&name));
                (rel, !ours)
            }
            // What cannot be listed cannot be known to be ours.
            Err(e) => (
                e.path().map_or_else(
                    || "?".to_string(),
                    |p| {
                        p.strip_prefix(dir)
                            .unwrap_or(p)
                            .to_string_lossy()
                            .into_owned()
                    },
                ),
                true,
            ),
        };
        if unlisted {
            count += 1;
            if found.len() < 5 {
                found.push(format!("`{}`", crate::diag::printable_clipped(&rel, 60)));
            }
        }
    }
    (count > 0).then(|| {
        let more = if count > found.len() {
            format!(" and {} more", count - found.len())
        } else {
            String::new()
        };
        format!(
            "it holds a previous cohortpress output, but also {}{more} that the output's \
             {marker} does not list (put there since, or links); {UNLISTED_ADVICE}",
            found.join(", ")
        )
    })
}

/// Whether the folder `dir` (links resolved) is a mount point: another file system is mounted
/// there (a USB stick, a network share, a container's volume), or a folder is bind-mounted
/// there. Neither can be renamed (`EBUSY`), and the swap renames the output folder.
fn is_mount_point(dir: &Path) -> bool {
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        if let (Ok(m), Some(Ok(p))) = (fs::metadata(dir), dir.parent().map(fs::metadata))
            && m.dev() != p.dev()
        {
            return true;
        }
    }
    // A bind mount of a folder of the same file system: only the mount table tells.
    fs::read_to_string("/proc/self/mountinfo").is_ok_and(|table| listed_in_mountinfo(&table, dir))
}

/// Whether `/proc/self/mountinfo` text lists `dir` as a mount point (its fifth field, with
/// space, tab, newline and backslash written as octal escapes, `\040`).
fn listed_in_mountinfo(table: &str, dir: &Path) -> bool {
    let unescape = |field: &str| -> Vec<u8> {
        let b = field.as_bytes();
        let mut out = Vec::with_capacity(b.len());
        let mut i = 0;
        while i < b.len() {
            let octal = b
                .get(i + 1..i + 4)
                .filter(|d| b[i] == b'\\' && d.iter().all(|c| (b'0'..=b'7').contains(c)));
            match octal {
                Some(d) => {
                    out.push((d[0] - b'0') * 64 + (d[1] - b'0') * 8 + (d[2] - b'0'));
                    i += 4;
                }
                None => {
                    out.push(b[i]);
                    i += 1;
                }
            }
        }
        out
    };
    let want = dir.as_os_str().as_encoded_bytes();
    table
        .lines()
        .filter_map(|l| l.split(' ').nth(4))
        .any(|mp| unescape(mp) == want)
}

/// Whether `dir` is a real folder (not a link) that is empty or holds one of our outputs: the
/// only kind of leftover `.NAME.previous` a run moves or removes.
fn is_our_folder(dir: &Path) -> bool {
    fs::symlink_metadata(dir).is_ok_and(|m| m.is_dir())
        && matches!(
            existing_output(dir),
            Ok(Existing::Empty | Existing::Ours(..))
        )
}

fn in_the_way(previous: &Path) -> StagingError {
    StagingError::Refused(format!(
        "{} is in the way of the output swap and is not a cohortpress output (or is a link); \
         move it away",
        previous.display()
    ))
}

/// The output folder with every link resolved: the folder itself if it exists, else its
/// (created) parent resolved plus its name.
fn resolve_output(dir: &Path, named_by: &str) -> Result<PathBuf, StagingError> {
    let refuse = |what: String| StagingError::Refused(what);
    match fs::symlink_metadata(dir) {
        Ok(_) => fs::canonicalize(dir).map_err(|e| {
            refuse(format!(
                "the output folder {} ({named_by}) cannot be resolved ({e}); if it is a link, \
                 its target must exist",
                dir.display()
            ))
        }),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {
            // Nothing is created here: the nearest folder that exists is resolved and the
            // missing names appended; `Staging::begin` creates them once the folder is
            // accepted (a refused run leaves no new folder, e.g. inside a participant's).
            let mut missing = Vec::new();
            let mut existing = dir.to_path_buf();
            loop {
                match fs::symlink_metadata(&existing) {
                    Ok(_) => break,
                    Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
                    Err(e) => return Err(io(&existing)(e)),
                }
                let name = existing.file_name().ok_or_else(|| {
                    refuse(format!(
                        "the output folder {} ({named_by}) cannot be resolved: `..` after a \
                         folder that does not exist; name the folder without `..`",
                        dir.display()
                    ))
                })?;
                missing.push(name.to_os_string());
                existing = match existing.parent() {
                    Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
                    _ => PathBuf::from("."),
                };
            }
            let mut out = fs::canonicalize(&existing).map_err(io(&existing))?;
            out.extend(missing.iter().rev());
            Ok(out)
        }
        // A file where the path needs a folder (`--out notes.txt/reports`): the command line
        // names a folder that cannot exist. It was "writing outputs failed: …: Not a directory
        // (os error 20)", exit 6, as if the disk had failed, and `check` said nothing.
        Err(e) if e.kind() == std::io::ErrorKind::NotADirectory => {
            let file = dir
                .ancestors()
                .skip(1)
                .find(|a| fs::metadata(a).is_ok_and(|m| !m.is_dir()));
            Err(refuse(match file {
                Some(f) => format!(
                    "refusing to write the output to {} ({named_by}): {} is a file, not a \
                     folder, so no folder can be made inside it; check the path, or name a \
                     folder elsewhere",
                    dir.display(),
                    f.display()
                ),
                None => format!(
                    "refusing to write the output to {} ({named_by}): a part of its path is a \
                     file, not a folder ({e}); check the path, or name a folder elsewhere",
                    dir.display()
                ),
            }))
        }
        Err(e) => Err(io(dir)(e)),
    }
}

/// Refuses an output folder that is, contains, or lies inside the program's inputs.
fn check_not_inputs(out: &Path, target: &OutputTarget) -> Result<(), StagingError> {
    let program = fs::canonicalize(&target.program_root).map_err(io(&target.program_root))?;
    let participants = program.join(target.participants_dir);
    // participants/ may be a link (to a share): its real folder is just as much an input, and
    // so is the templates folder.
    let resolved = |p: &Path| fs::canonicalize(p).ok().filter(|r| r != p);
    let real_participants = resolved(&participants);
    let templates = target
        .templates
        .as_deref()
        .and_then(|t| fs::canonicalize(t).ok());
    let why = if out == program {
        Some("it is the program folder itself")
    } else if program.starts_with(out) {
        Some("it contains the program folder")
    } else if out.starts_with(&participants)
        || real_participants
            .as_ref()
            .is_some_and(|p| out.starts_with(p) || p.starts_with(out))
    {
        Some("it is, holds or lies inside the program's participants/ folder")
    } else if templates
        .as_ref()
        .is_some_and(|t| out.starts_with(t) || t.starts_with(out))
    {
        Some("it is, holds or lies inside the program's templates folder (report.templates)")
    } else {
        None
    };
    match why {
        None => Ok(()),
        Some(why) => Err(StagingError::Refused(format!(
            "refusing to write the output to {} ({}): {why}, and a run replaces its output \
             folder as a whole; name a folder of its own, e.g. {}",
            out.display(),
            target.named_by,
            program.join("reports").display()
        ))),
    }
}

/// Refuses to replace an existing output folder that is not ours, or a complete output with a
/// partial one.
fn check_replaceable(out_dir: &Path, target: &OutputTarget) -> Result<(), StagingError> {
    match fs::symlink_metadata(out_dir) {
        Err(_) => {}
        Ok(meta) if !meta.is_dir() => {
            return Err(StagingError::Refused(format!(
                "refusing to write the output to {} ({}): it is a file, not a folder",
                out_dir.display(),
                target.named_by
            )));
        }
        Ok(_) if is_mount_point(out_dir) => {
            return Err(StagingError::Refused(format!(
                "refusing to write the output to {} ({}): it is a mount point (a disk, share or \
                 volume mounted there), and a run puts its output in place by renaming the \
                 folder, which a mount point cannot be (every run would compute everything and \
                 then fail); name a folder inside it, e.g. {}",
                out_dir.display(),
                target.named_by,
                out_dir.join("reports").display()
            )));
        }
        Ok(_) => match existing_output(out_dir) {
            Ok(Existing::Empty) => {}
            Ok(Existing::Ours(_, Some(other))) if other != target.program_id => {
                return Err(StagingError::Refused(format!(
                    "refusing to write the output to {} ({}): it holds the output of another \
                     program, `{other}` (this one is `{}`), and a run replaces its output folder \
                     as a whole; give each program an output folder of its own",
                    out_dir.display(),
                    target.named_by,
                    target.program_id
                )));
            }
            Ok(Existing::Ours(OutputScope::Complete, _))
                if target.scope != OutputScope::Complete =>
            {
                return Err(StagingError::Partial(format!(
                    "refusing to replace the complete output in {} with a partial one \
                         ({}); give the partial run a folder of its own with --out DIR",
                    out_dir.display(),
                    match target.scope {
                        OutputScope::Only => "--only",
                        _ => "--shard",
                    }
                )));
            }
            Ok(Existing::Ours(..)) => {}
            Err(found) => {
                // The files of someone else's in an output of ours say what to do already.
                let advice = if found.ends_with(UNLISTED_ADVICE) {
                    ""
                } else {
                    ". A run replaces its output folder as a whole, so it only writes to a new \
                     folder, an empty one, or one a previous run wrote; check the path, or name \
                     a new folder"
                };
                return Err(StagingError::Refused(format!(
                    "refusing to write the output to {} ({}): {found}{advice}",
                    out_dir.display(),
                    target.named_by
                )));
            }
        },
    }
    Ok(())
}

/// `.NAME SUFFIX` as one file name, byte for byte: the staging folder, lock file and previous
/// copy of the output folder `NAME`. Made from the name's text, a name that is not UTF-8 (`\xff`)
/// was written `\u{fffd}`, so two output folders differing there shared one lock, one staging
/// folder and one previous copy.
fn sibling(name: &std::ffi::OsStr, suffix: &str) -> std::ffi::OsString {
    let mut s = std::ffi::OsString::from(".");
    s.push(name);
    s.push(suffix);
    s
}

impl Staging {
    /// Takes the lock for the target's output folder (links resolved), checks the folder may
    /// be replaced by this run, and prepares an empty staging folder beside it.
    pub fn begin(target: &OutputTarget, access: Access) -> Result<Staging, StagingError> {
        let out_dir = resolve_output(&target.dir, target.named_by)?;
        check_not_inputs(&out_dir, target)?;
        let name = out_dir
            .file_name()
            .map(std::ffi::OsStr::to_os_string)
            .ok_or_else(|| {
                StagingError::Refused(format!(
                    "the output folder {} ({}) has no folder name",
                    out_dir.display(),
                    target.named_by
                ))
            })?;
        let parent = out_dir
            .parent()
            .map(Path::to_path_buf)
            .unwrap_or_else(|| PathBuf::from("/"));
        // Refuse before the lock file is created, so a refused run leaves no trace; checked again
        // under the lock below, after any recovery.
        let previous = parent.join(sibling(&name, ".previous"));
        if fs::symlink_metadata(&out_dir).is_ok() {
            check_replaceable(&out_dir, target)?;
        } else if fs::symlink_metadata(&previous).is_ok() && !is_our_folder(&previous) {
            return Err(in_the_way(&previous));
        }
        create_parents(&parent)?;
        let lock_path = parent.join(sibling(&name, ".lock"));
        let lock = crate::limits::open_lock_file(&lock_path).map_err(io(&lock_path))?;
        match lock.try_lock() {
            Ok(()) => {}
            Err(fs::TryLockError::WouldBlock) => {
                return Err(StagingError::Locked(format!(
                    "another cohortpress run is writing to {}; wait for it to finish (lock: {})",
                    out_dir.display(),
                    lock_path.display()
                )));
            }
            Err(fs::TryLockError::Error(e)) => return Err(io(&lock_path)(e)),
        }
        let dir = parent.join(sibling(&name, ".staging"));
        // A run killed between the two renames of a commit left the complete previous output
        // here: put it back before anything else. A previous copy beside a complete output is
        // a removal that failed (a read-only folder, say): finish it.
        // Only a real folder (never a link) that holds one of our outputs, or nothing, is
        // touched.
        if fs::symlink_metadata(&previous).is_ok() {
            if !is_our_folder(&previous) {
                return Err(in_the_way(&previous));
            }
            if fs::symlink_metadata(&out_dir).is_err() {
                fs::rename(&previous, &out_dir).map_err(io(&out_dir))?;
                tracing::warn!(
                    "a run into {} was stopped (killed, or a power cut) as it put its output \
                     in place; the output before it was put back from {}",
                    out_dir.display(),
                    previous.display()
                );
            } else {
                remove_ours(&previous, MANIFEST)?;
            }
        }
        check_replaceable(&out_dir, target)?;
        // Staging left by a killed run: we hold the lock, so nobody else is using it.
        if let Ok(meta) = fs::symlink_metadata(&dir) {
            // Ours: a real folder (a link is never followed nor removed) that holds the
            // marker, or is empty (a run killed right after creating it).
            let ours = meta.is_dir()
                && (fs::symlink_metadata(dir.join(STAGING_MARKER)).is_ok_and(|m| m.is_file())
                    || fs::read_dir(&dir).is_ok_and(|mut d| d.next().is_none()));
            if !ours {
                return Err(StagingError::Refused(format!(
                    "{} is in the way of the output staging folder and was not made by \
                     cohortpress; move it away",
                    dir.display()
                )));
            }
            remove_ours(&dir, STAGING_MARKER)?;
            // Said, so that a log whose last run has a start line and no end (SIGKILL, a power
            // cut) is explained by the next one (tryout24: the removal was silent).
            let left = if fs::symlink_metadata(&out_dir).is_ok() {
                format!("{} was left as that run found it", out_dir.display())
            } else {
                "nothing had been put in its place".to_string()
            };
            tracing::warn!(
                "a run into {} did not finish (killed, or a power cut): its unfinished output \
                 {} was removed, and {left}",
                out_dir.display(),
                dir.display(),
            );
        }
        let handle = {
            // Registered as it is made: an interrupt from here on removes it.
            let mut live = live_staging();
            // Made here and now (never a folder or link already at its name), and known from
            // then on by its handle and identity, which the commit checks before it moves it
            // into place.
            create_new_dir(&dir, access)?;
            let handle = open_new_staging(&dir, access)?;
            live.push((dir.clone(), out_dir.clone(), STAGING_MARKER));
            handle
        };
        let staging_id = handle_id(&handle, &dir).map_err(io(&dir))?;
        clear_interrupted_siblings(&parent, &name);
        Ok(Staging {
            access,
            final_dir: out_dir,
            dir,
            staging_id,
            handle,
            previous,
            written: Mutex::new(Vec::new()),
            folders: Mutex::new(std::collections::BTreeSet::new()),
            committed: false,
            _lock: lock,
        })
    }

    /// Writes `bytes` to `rel` (a relative path with `/`) inside staging. Safe to call from
    /// several threads.
    pub fn write(&self, rel: &str, bytes: &[u8]) -> Result<OutputFile, StagingError> {
        let mut f = self.create(rel)?;
        f.write_whole(bytes)?;
        f.finish()
    }

    /// [`Staging::write`], but owner-only (folder 0700, file 0600) whatever the run's access:
    /// for identified outputs such as the clinician follow-up list.
    pub fn write_private(&self, rel: &str, bytes: &[u8]) -> Result<OutputFile, StagingError> {
        let mut f = self.create_with(rel, Access::Owner)?;
        f.write_whole(bytes)?;
        f.finish()
    }

    /// Reads back a file written into staging (a participant's partial result).
    pub fn read(&self, rel: &str) -> Result<Vec<u8>, StagingError> {
        let path = self.dir.join(rel);
        #[cfg(unix)]
        {
            use std::io::Read;
            let (folders, name) = split_rel(rel);
            let mut bytes = Vec::new();
            open_file_at(&self.handle, &folders, name)
                .and_then(|mut f| f.read_to_end(&mut bytes))
                .map_err(io(&path))?;
            Ok(bytes)
        }
        #[cfg(not(unix))]
        fs::read(&path).map_err(io(&path))
    }

    /// Opens `rel` (a relative path with `/`) inside staging for streaming writes; the file is
    /// recorded with its hash and size by [`StagingFile::finish`]. Safe to call from several
    /// threads.
    pub fn create(&self, rel: &str) -> Result<StagingFile<'_>, StagingError> {
        self.create_with(rel, self.access)
    }

    fn create_with(&self, rel: &str, access: Access) -> Result<StagingFile<'_>, StagingError> {
        // Output paths are built from checked ids; refuse anything that could leave the
        // staging folder all the same (defence in depth: a file name comes from user data).
        let safe = !rel.is_empty()
            && rel.split('/').all(|c| {
                !c.is_empty() && c != "." && c != ".." && !c.contains('\\') && !c.contains('\0')
            });
        if !safe {
            return Err(StagingError::Io {
                path: rel.to_string(),
                source: std::io::Error::new(
                    std::io::ErrorKind::InvalidInput,
                    "refusing an output path that is not a plain relative path",
                ),
            });
        }
        let path = self.dir.join(rel);
        // Held while the file (and its folders) are made: an interrupt that removed the
        // staging folder meanwhile would have it made again, without its marker.
        let _live = live_staging();
        #[cfg(unix)]
        let file = {
            let (folders, name) = split_rel(rel);
            let mut known = self
                .folders
                .lock()
                .expect("no panics while holding the lock");
            let made_before = path
                .parent()
                .is_none_or(|p| p == self.dir || known.contains(p));
            let file = new_file_at(&self.handle, &folders, name, access)
                .map_err(|e| self.write_failed(rel, e))?;
            if !made_before {
                let mut q = path.parent().expect("inside staging");
                while q != self.dir {
                    known.insert(q.to_path_buf());
                    q = q.parent().expect("inside staging");
                }
            }
            file
        };
        #[cfg(not(unix))]
        let file = {
            if let Some(p) = path.parent()
                && p != self.dir
            {
                let mut folders = self
                    .folders
                    .lock()
                    .expect("no panics while holding the lock");
                if !folders.contains(p) {
                    create_dir(p, access).map_err(|e| self.located(rel, e))?;
                    let mut q = p;
                    while q != self.dir {
                        folders.insert(q.to_path_buf());
                        q = q.parent().expect("inside staging");
                    }
                }
            }
            new_file(&path, access).map_err(|e| self.located(rel, e))?
        };
        Ok(StagingFile {
            staging: self,
            rel: rel.to_string(),
            out: std::io::BufWriter::with_capacity(1 << 16, file),
            hasher: blake3::Hasher::new(),
            bytes: 0,
        })
    }

    /// A write of `rel` refused (a full disk, a file-size limit), named as the user knows the
    /// file: the output folder's path and `rel`, not the staging folder's (which the run removes
    /// as it stops). tryout18 filled a tmpfs and read "participants/LS-002.html: No space left
    /// on device", with no folder, and no word that last month's reports were still there.
    fn write_failed(&self, rel: &str, source: std::io::Error) -> StagingError {
        StagingError::Write {
            path: if rel.is_empty() {
                self.final_dir.display().to_string()
            } else {
                self.final_dir.join(rel).display().to_string()
            },
            source,
            kept: self.kept(),
        }
    }

    /// What became of the output folder when the run stops before its swap: "the previous
    /// outputs in DIR were left as they were", or "nothing was written to DIR" when there were
    /// none (the ledger's refused write says it too).
    pub fn kept(&self) -> String {
        let shown = self.final_dir.display().to_string();
        if fs::symlink_metadata(&self.final_dir).is_ok() {
            format!("the previous outputs in {shown} were left as they were")
        } else {
            format!("nothing was written to {shown}")
        }
    }

    /// An error of the commit's sync naming a path in staging (`.NAME.staging/participants`),
    /// told by the output folder's path as [`Staging::write_failed`] tells a refused write: it
    /// named `.NAME.staging/…`, a folder the run removes as it stops and the user never named,
    /// and did not say the previous outputs were still in place.
    fn at_commit(&self, e: StagingError) -> StagingError {
        match e {
            StagingError::Io { path, source } => {
                let rel = Path::new(&path)
                    .strip_prefix(&self.dir)
                    .ok()
                    .map(|r| r.to_string_lossy().into_owned());
                match rel {
                    Some(rel) => self.write_failed(&rel, source),
                    None => StagingError::Io { path, source },
                }
            }
            other => other,
        }
    }

    /// A [`StagingError::Io`] from making `rel` (or a folder on its way) in staging, told as
    /// [`Staging::write_failed`] tells a refused write; other errors are passed on.
    #[cfg(not(unix))]
    fn located(&self, rel: &str, e: StagingError) -> StagingError {
        match e {
            StagingError::Io { source, .. } => self.write_failed(rel, source),
            other => other,
        }
    }

    /// The output folder this staging folder will replace (links resolved; its current
    /// content is the previous complete output, if any).
    pub fn final_dir(&self) -> &Path {
        &self.final_dir
    }

    /// The files written so far, sorted by path.
    pub fn files(&self) -> Vec<OutputFile> {
        let mut v = self
            .written
            .lock()
            .expect("no panics while holding the lock")
            .clone();
        v.sort();
        v
    }

    /// Moves the staging folder into place (keeping the previous output until the new one is
    /// there, every file and folder fsync'd first) and releases the lock.
    pub fn commit(mut self) -> Result<OutputSet, StagingError> {
        let files = self.files().len();
        let folders = std::mem::take(
            &mut *self
                .folders
                .lock()
                .expect("no panics while holding the lock"),
        );
        // The staging folder must be the one this run made: one swapped for a link (or another
        // folder) while the run went on would be renamed into place as the output, a link
        // to somewhere else.
        if folder_id(&self.dir).ok() != Some(self.staging_id) {
            return Err(StagingError::Io {
                path: self.dir.display().to_string(),
                source: std::io::Error::other(format!(
                    "the staging folder was replaced (by a link or another folder) while the \
                     run went on; it was left as it is and not put in place; {}",
                    self.kept()
                )),
            });
        }
        sync_written(&self.dir, folders.iter().rev().map(PathBuf::as_path))
            .map_err(|e| self.at_commit(e))?;
        let mut was_empty = false;
        // Held across the two renames: an interrupt waits for the new output to be in place
        // (or for the previous one to be back), never leaving the output folder missing.
        let mut live = live_staging();
        let moved_aside = fs::symlink_metadata(&self.final_dir).is_ok();
        if moved_aside {
            // Refused, the previous output is still in place under its name.
            fs::rename(&self.final_dir, &self.previous)
                .map_err(|source| self.write_failed("", source))?;
            // Checked again once it is out of the way (nothing can be added to it under its
            // old name any more): a folder that was empty when the run began may have been
            // given files since (someone saving to a shared drive); it is put back untouched.
            // So is anything but a real folder: a folder moved elsewhere (to an archive) and a
            // link left in its place is never followed to what it leads to.
            let now = if fs::symlink_metadata(&self.previous).is_ok_and(|m| m.is_dir()) {
                existing_output(&self.previous)
            } else {
                Err("it is no longer a folder but a symbolic link or a file".to_string())
            };
            match now {
                Ok(Existing::Ours(..)) => {}
                Ok(Existing::Empty) => was_empty = true,
                Err(found) => {
                    fs::rename(&self.previous, &self.final_dir).map_err(io(&self.previous))?;
                    return Err(StagingError::Io {
                        path: self.final_dir.display().to_string(),
                        source: std::io::Error::other(format!(
                            "the output folder changed while the run went on ({found}); it \
                             was left as it is and the new output was not written; check \
                             what is in it, or name a new folder"
                        )),
                    });
                }
            }
        }
        if let Err(source) = fs::rename(&self.dir, &self.final_dir) {
            // The previous output goes back under its name, so that the run stops with it in
            // place as every earlier failure does; "io(final_dir)" alone left it, unsaid, in
            // `.NAME.previous`.
            let kept = if !moved_aside || fs::rename(&self.previous, &self.final_dir).is_ok() {
                self.kept()
            } else {
                format!(
                    "the previous outputs are in {}: rename it back to {}",
                    self.previous.display(),
                    self.final_dir.display()
                )
            };
            return Err(StagingError::Write {
                path: self.final_dir.display().to_string(),
                source,
                kept,
            });
        }
        self.committed = true;
        live.retain(|(dir, ..)| *dir != self.dir);
        placed(&self.final_dir);
        drop(live);
        // The marker goes last, so a staging folder is recognisable as ours until it is in place.
        let marker = self.final_dir.join(STAGING_MARKER);
        if let Err(e) = fs::remove_file(&marker)
            && e.kind() != std::io::ErrorKind::NotFound
        {
            return Err(io(&marker)(e));
        }
        if let Some(parent) = self.final_dir.parent() {
            sync_dir(parent)?;
        }
        // An empty folder is removed only while it is still empty (`rmdir`).
        let removed = if was_empty {
            fs::remove_dir(&self.previous).map_err(io(&self.previous))
        } else {
            remove_ours(&self.previous, MANIFEST)
        };
        if fs::symlink_metadata(&self.previous).is_ok()
            && let Err(e) = removed
        {
            // The new output is in place; the next run finishes the removal.
            tracing::warn!("the previous output could not be removed yet: {e}");
        }
        Ok(OutputSet { files })
    }
}

/// Removes, with a warning, the staging folders that runs into other output folders of
/// `parent` left when they were killed (SIGKILL, SIGTERM, a power cut): `.X.staging` holding
/// our marker beside a `.X.lock` that no run holds. Only the next run into `X` removed such a
/// folder, and with the README's crontab line (a folder per month) no later run writes into a
/// month's folder again: a June run killed at 03:00 left `.2026-06.staging`, half of June's
/// identified reports, for good, and the July run said nothing, so the log never told that
/// June had no output. The lock is held while the folder is removed, so a run into `X` started
/// meanwhile stops with exit code 7 rather than have its staging folder removed. Nothing here
/// fails the run: what cannot be read or removed is left as it was, with a warning.
fn clear_interrupted_siblings(parent: &Path, own: &std::ffi::OsStr) {
    let Ok(entries) = fs::read_dir(parent) else {
        return;
    };
    for entry in entries.flatten() {
        let file_name = entry.file_name();
        let Some(name) = file_name
            .to_str()
            .and_then(|n| n.strip_prefix('.'))
            .and_then(|n| n.strip_suffix(".staging"))
        else {
            continue;
        };
        if name.is_empty() || std::ffi::OsStr::new(name) == own {
            continue;
        }
        let dir = entry.path();
        let lock_path = parent.join(format!(".{name}.lock"));
        // Ours only: a real folder with the marker, beside a lock file that is a regular file.
        let ours = entry.file_type().is_ok_and(|t| t.is_dir())
            && fs::symlink_metadata(dir.join(STAGING_MARKER)).is_ok_and(|m| m.is_file())
            && fs::symlink_metadata(&lock_path).is_ok_and(|m| m.is_file());
        if !ours {
            continue;
        }
        let Ok(lock) = crate::limits::open_lock_file(&lock_path) else {
            continue;
        };
        // Held: that run is still writing.
        if lock.try_lock().is_err() {
            continue;
        }
        let files = walkdir::WalkDir::new(&dir)
            .follow_links(false)
            .into_iter()
            .flatten()
            .filter(|e| e.file_type().is_file() && e.file_name() != STAGING_MARKER)
            .count();
        let out = parent.join(name);
        let state = if fs::symlink_metadata(&out).is_ok() {
            format!("{} still holds the output of an earlier run", out.display())
        } else {
            format!(
                "{} was never written: run that period again to have it",
                out.display()
            )
        };
        match remove_ours(&dir, STAGING_MARKER) {
            Ok(()) => tracing::warn!(
                "a run into {} was stopped before it finished (killed, or the machine went \
                 down) and left {} ({files} files, not a complete output); removed it. {state}",
                out.display(),
                dir.display()
            ),
            Err(e) => tracing::warn!(
                "a run into {} was stopped before it finished (killed, or the machine went \
                 down) and left {} ({files} files, not a complete output), which could not be \
                 removed ({e}); {state}",
                out.display(),
                dir.display()
            ),
        }
    }
}

impl Drop for Staging {
    /// A run that fails (or panics) before its commit leaves nothing behind: its staging
    /// folder is removed, and the previous output was never touched.
    fn drop(&mut self) {
        if !self.committed {
            let mut live = live_staging();
            let _ = remove_ours(&self.dir, STAGING_MARKER);
            live.retain(|(dir, ..)| *dir != self.dir);
        }
    }
}

/// The file that makes an output folder recognisably ours.
const MANIFEST: &str = "manifest.json";

/// Removes a folder this tool made (staging or a previous output). Folders made read-only
/// after the fact (by a user or a backup tool) are made writable for the owner first; links
/// inside are removed, never followed.
///
/// `mark` (the manifest of a previous output, the marker of a staging folder) goes last, just
/// before the folder itself: a removal stopped part way (the process killed, a power cut, a
/// file that cannot be removed) leaves a folder that still shows it is ours, which the next run
/// finishes removing. Removed in any order, a `.NAME.previous` that had lost its manifest
/// was "not a cohortpress output", and every later run refused to start until someone removed
/// it by hand.
fn remove_ours(dir: &Path, mark: &str) -> Result<(), StagingError> {
    match remove_marked_last(dir, mark) {
        Ok(()) => Ok(()),
        Err(e) if e.kind() == std::io::ErrorKind::NotFound && !dir.exists() => Ok(()),
        Err(e) => Err(io(dir)(e)),
    }
}

/// Removes `dir` and everything in it, `mark` last, through handles: `dir` is opened once
/// without following a link (`O_DIRECTORY | O_NOFOLLOW`), and every folder inside it relative
/// to its parent's handle, so no link is ever followed, at the top either. Given a path, a
/// `.NAME.previous` or `.NAME.staging` swapped for a link while a run went on (a folder moved
/// to an archive and a link left in its place) had everything the link led to deleted: the
/// archived output of an earlier month, or a user's folder, while the log said only that the
/// link "could not be removed" ("Not a directory"). A link at `dir` is now an error and nothing
/// is removed. A folder made read-only after the fact (by a user or a backup tool) is made
/// writable for the owner, through its handle, before its entries are removed.
#[cfg(unix)]
fn remove_marked_last(dir: &Path, mark: &str) -> std::io::Result<()> {
    use rustix::fs::{AtFlags, Mode, OFlags};
    let flags = OFlags::RDONLY | OFlags::DIRECTORY | OFlags::NOFOLLOW | OFlags::CLOEXEC;
    let fd = rustix::fs::open(dir, flags, Mode::empty()).map_err(|e| {
        if fs::symlink_metadata(dir).is_ok_and(|m| m.file_type().is_symlink()) {
            std::io::Error::other(
                "it is a symbolic link, which is never followed nor removed: move it away",
            )
        } else {
            e.into()
        }
    })?;
    let mut writable = remove_entries_at(&fd, Some(mark))?;
    unlink_at(&fd, mark, AtFlags::empty(), &mut writable)?;
    drop(fd);
    fs::remove_dir(dir)
}

/// Removes every entry of the folder open as `fd` but `keep`; folders inside are opened
/// relative to it without following links (a link is removed as a file). Whether the folder
/// was made writable on the way is returned.
#[cfg(unix)]
fn remove_entries_at(fd: &std::os::fd::OwnedFd, keep: Option<&str>) -> std::io::Result<bool> {
    use rustix::fs::{AtFlags, FileType, Mode, OFlags};
    let mut names = Vec::new();
    for entry in rustix::fs::Dir::read_from(fd)? {
        let entry = entry?;
        let name = entry.file_name().to_owned();
        let bytes = name.to_bytes();
        if bytes == b"." || bytes == b".." || keep.is_some_and(|k| k.as_bytes() == bytes) {
            continue;
        }
        names.push(name);
    }
    let mut writable = false;
    for name in names {
        let st = rustix::fs::statat(fd, name.as_c_str(), AtFlags::SYMLINK_NOFOLLOW)?;
        let is_dir = FileType::from_raw_mode(st.st_mode) == FileType::Directory;
        if is_dir {
            let flags = OFlags::RDONLY | OFlags::DIRECTORY | OFlags::NOFOLLOW | OFlags::CLOEXEC;
            let sub = match rustix::fs::openat(fd, name.as_c_str(), flags, Mode::empty()) {
                Ok(sub) => sub,
                Err(rustix::io::Errno::ACCESS) => {
                    // A folder without the owner's read permission (mode 000): given it, then
                    // opened as above (a link put there meanwhile is still not followed).
                    let mode = Mode::from_raw_mode(st.st_mode & 0o7777) | Mode::RWXU;
                    rustix::fs::chmodat(fd, name.as_c_str(), mode, AtFlags::empty())?;
                    rustix::fs::openat(fd, name.as_c_str(), flags, Mode::empty())?
                }
                Err(e) => return Err(e.into()),
            };
            remove_entries_at(&sub, None)?;
        }
        let how = if is_dir {
            AtFlags::REMOVEDIR
        } else {
            AtFlags::empty()
        };
        unlink_at(fd, name.as_c_str(), how, &mut writable)?;
    }
    Ok(writable)
}

/// Removes the entry `name` of the folder open as `fd`; refused for want of access, the folder
/// is made writable for the owner once (`writable` says whether it was) and it is tried again.
/// One that is gone already is no error.
#[cfg(unix)]
fn unlink_at<P: rustix::path::Arg + Copy>(
    fd: &std::os::fd::OwnedFd,
    name: P,
    how: rustix::fs::AtFlags,
    writable: &mut bool,
) -> std::io::Result<()> {
    use rustix::io::Errno;
    match rustix::fs::unlinkat(fd, name, how) {
        Ok(()) | Err(Errno::NOENT) => Ok(()),
        Err(Errno::ACCESS | Errno::PERM) if !*writable => {
            make_owner_writable(fd)?;
            *writable = true;
            match rustix::fs::unlinkat(fd, name, how) {
                Ok(()) | Err(Errno::NOENT) => Ok(()),
                Err(e) => Err(e.into()),
            }
        }
        Err(e) => Err(e.into()),
    }
}

/// Gives the owner full access to the folder open as `fd` (a folder made read-only after the
/// fact), through its handle.
#[cfg(unix)]
fn make_owner_writable(fd: &std::os::fd::OwnedFd) -> std::io::Result<()> {
    let st = rustix::fs::fstat(fd)?;
    let mode = rustix::fs::Mode::from_raw_mode(st.st_mode & 0o7777) | rustix::fs::Mode::RWXU;
    rustix::fs::fchmod(fd, mode)?;
    Ok(())
}

#[cfg(not(unix))]
fn remove_marked_last(dir: &Path, mark: &str) -> std::io::Result<()> {
    if fs::symlink_metadata(dir)?.file_type().is_symlink() {
        return Err(std::io::Error::other(
            "it is a symbolic link, which is never followed nor removed: move it away",
        ));
    }
    for entry in fs::read_dir(dir)? {
        let entry = entry?;
        if entry.file_name() == mark {
            continue;
        }
        // `file_type` does not follow links: a link is removed as a file.
        if entry.file_type()?.is_dir() {
            fs::remove_dir_all(entry.path())?;
        } else {
            fs::remove_file(entry.path())?;
        }
    }
    match fs::remove_file(dir.join(mark)) {
        Ok(()) => {}
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
        Err(e) => return Err(e),
    }
    fs::remove_dir(dir)
}

/// Creates the output's missing parent folders (`mkdir -p`, with the user's umask).
fn create_parents(parent: &Path) -> Result<(), StagingError> {
    fs::create_dir_all(parent).map_err(io(parent))
}

/// Makes a folder's entries durable (fsync of the folder itself): after a rename into it.
pub fn sync_dir(dir: &Path) -> Result<(), StagingError> {
    File::open(dir).and_then(|f| f.sync_all()).map_err(io(dir))
}

/// Makes everything written under the staging folder `dir` durable before it is renamed into
/// place: the file system holding it is synced (`syncfs`, Linux: every file's data, one call
/// rather than one per file), then each of `folders` (its subfolders, deepest first) and `dir`
/// itself. A run's commit does this to its staging folder, and `import` to its own, so that a
/// power cut after the rename never leaves a name pointing at an empty or short file.
pub fn sync_written<'a>(
    dir: &Path,
    folders: impl IntoIterator<Item = &'a Path>,
) -> Result<(), StagingError> {
    #[cfg(target_os = "linux")]
    {
        let d = File::open(dir).map_err(io(dir))?;
        rustix::fs::syncfs(&d).map_err(|e| io(dir)(e.into()))?;
    }
    for f in folders {
        sync_dir(f)?;
    }
    sync_dir(dir)
}

/// Makes folder `p` (and the missing ones above it).
#[cfg(not(unix))]
fn create_dir(p: &Path, _access: Access) -> Result<(), StagingError> {
    fs::create_dir_all(p).map_err(io(p))
}

/// Makes folder `p` (its parent exists) with the mode of `access`, whatever the umask; fails
/// when anything, a link included, is at its name already.
fn create_new_dir(p: &Path, access: Access) -> Result<(), StagingError> {
    let mut builder = fs::DirBuilder::new();
    #[cfg(unix)]
    {
        use std::os::unix::fs::{DirBuilderExt, PermissionsExt};
        builder.mode(access.dir_mode());
        builder.create(p).map_err(io(p))?;
        fs::set_permissions(p, fs::Permissions::from_mode(access.dir_mode())).map_err(io(p))
    }
    #[cfg(not(unix))]
    {
        let _ = access;
        builder.create(p).map_err(io(p))
    }
}

/// What tells a folder from another one put at its name (device and inode), read without
/// following a link: a link, or anything but a folder, is an error.
#[cfg(unix)]
type FolderId = (u64, u64);
#[cfg(not(unix))]
type FolderId = ();

fn folder_id(p: &Path) -> std::io::Result<FolderId> {
    let m = fs::symlink_metadata(p)?;
    if !m.is_dir() {
        return Err(std::io::Error::other("not a folder"));
    }
    #[cfg(unix)]
    {
        use std::os::unix::fs::MetadataExt;
        Ok((m.dev(), m.ino()))
    }
    #[cfg(not(unix))]
    Ok(())
}

/// `rel` (a plain relative path with `/`, checked by the caller) as its folders and its file
/// name.
#[cfg(unix)]
fn split_rel(rel: &str) -> (Vec<&str>, &str) {
    let mut parts: Vec<&str> = rel.split('/').collect();
    let name = parts.pop().expect("split gives at least one part");
    (parts, name)
}

/// A staging folder opened once as it was made (unix: a folder handle; elsewhere nothing, and
/// files are made by path).
#[cfg(unix)]
type StagingHandle = std::os::fd::OwnedFd;
#[cfg(not(unix))]
type StagingHandle = ();

/// Opens the staging folder `dir` just made, without following a link at its name
/// (`O_DIRECTORY | O_NOFOLLOW`), and makes its marker file in it.
#[cfg(unix)]
fn open_new_staging(dir: &Path, access: Access) -> Result<StagingHandle, StagingError> {
    use rustix::fs::{Mode, OFlags};
    let flags = OFlags::RDONLY | OFlags::DIRECTORY | OFlags::NOFOLLOW | OFlags::CLOEXEC;
    let handle = rustix::fs::open(dir, flags, Mode::empty()).map_err(|e| io(dir)(e.into()))?;
    new_file_at(&handle, &[], STAGING_MARKER, access).map_err(io(&dir.join(STAGING_MARKER)))?;
    Ok(handle)
}

#[cfg(not(unix))]
fn open_new_staging(dir: &Path, access: Access) -> Result<StagingHandle, StagingError> {
    new_file(&dir.join(STAGING_MARKER), access).map(|_| ())
}

/// The identity of the staging folder: of the folder its handle holds (unix), else of the
/// folder at its name.
///
/// Read through the standard library's metadata, as [`folder_id`] reads the folder at its name
/// for the commit's check, so both give the device number the same way: `rustix`'s `fstat`
/// gives the platform's `dev_t`, an `i32` on macOS and OpenBSD, which did not compile there as
/// the `u64` of [`FolderId`].
#[cfg(unix)]
fn handle_id(handle: &StagingHandle, _dir: &Path) -> std::io::Result<FolderId> {
    use std::os::unix::fs::MetadataExt;
    let m = File::from(handle.try_clone()?).metadata()?;
    Ok((m.dev(), m.ino()))
}

#[cfg(not(unix))]
fn handle_id(_handle: &StagingHandle, dir: &Path) -> std::io::Result<FolderId> {
    folder_id(dir)
}

/// Opens the folder `folders` (one name per level) inside the folder open as `root`, one level
/// at a time and never through a link; with `make`, a missing level is made with `make`'s
/// mode, whatever the umask: a mode given at creation is cut by the umask, so under
/// `umask 077` (a hardened server's, or a crontab's) `--group-readable` made 0700 folders and
/// 0600 files the reports group could not read. A link, or anything but a folder, on the way
/// is an error: nothing is made or read through it. `None` when `folders` is empty (the file
/// is in `root` itself).
///
/// Written here rather than taken from a crate: the standard library's folder and file calls
/// take paths only, and the crates that offer handle-relative ones (`cap-std`, `openat`) would
/// be a second way of doing what `rustix` (already used for the removal of folders) does.
#[cfg(unix)]
fn open_folders_at(
    root: &std::os::fd::OwnedFd,
    folders: &[&str],
    make: Option<Access>,
) -> std::io::Result<Option<std::os::fd::OwnedFd>> {
    use rustix::fs::{Mode, OFlags};
    use rustix::io::Errno;
    use std::os::fd::AsFd;
    let flags = OFlags::RDONLY | OFlags::DIRECTORY | OFlags::NOFOLLOW | OFlags::CLOEXEC;
    let mut current: Option<std::os::fd::OwnedFd> = None;
    for name in folders {
        let at = current.as_ref().map_or(root.as_fd(), |f| f.as_fd());
        let mut made = false;
        if let Some(access) = make {
            match rustix::fs::mkdirat(at, *name, Mode::from_raw_mode(access.dir_mode())) {
                Ok(()) => made = true,
                Err(Errno::EXIST) => {}
                Err(e) => return Err(e.into()),
            }
        }
        let next = rustix::fs::openat(at, *name, flags, Mode::empty()).map_err(|e| match e {
            Errno::LOOP | Errno::NOTDIR => std::io::Error::other(format!(
                "{name} is a link or a file, not a folder; nothing is written through it"
            )),
            e => e.into(),
        })?;
        if let (true, Some(access)) = (made, make) {
            rustix::fs::fchmod(&next, Mode::from_raw_mode(access.dir_mode()))?;
        }
        current = Some(next);
    }
    Ok(current)
}

/// Makes the new file `name` in the folder `folders` inside the folder open as `root` (made as
/// needed, see [`open_folders_at`]) with the mode of `access`, whatever the umask; fails when
/// anything, a link included, is at its name already.
#[cfg(unix)]
fn new_file_at(
    root: &std::os::fd::OwnedFd,
    folders: &[&str],
    name: &str,
    access: Access,
) -> std::io::Result<File> {
    use rustix::fs::{Mode, OFlags};
    use std::os::fd::AsFd;
    let folder = open_folders_at(root, folders, Some(access))?;
    let at = folder.as_ref().map_or(root.as_fd(), |f| f.as_fd());
    let flags = OFlags::WRONLY | OFlags::CREATE | OFlags::EXCL | OFlags::NOFOLLOW | OFlags::CLOEXEC;
    let mode = Mode::from_raw_mode(access.file_mode());
    let fd = rustix::fs::openat(at, name, flags, mode)?;
    rustix::fs::fchmod(&fd, mode)?;
    Ok(File::from(fd))
}

/// Opens the file `name` in the folder `folders` inside the folder open as `root` for reading,
/// never through a link.
#[cfg(unix)]
fn open_file_at(
    root: &std::os::fd::OwnedFd,
    folders: &[&str],
    name: &str,
) -> std::io::Result<File> {
    use rustix::fs::{Mode, OFlags};
    use std::os::fd::AsFd;
    let folder = open_folders_at(root, folders, None)?;
    let at = folder.as_ref().map_or(root.as_fd(), |f| f.as_fd());
    let fd = rustix::fs::openat(
        at,
        name,
        OFlags::RDONLY | OFlags::NOFOLLOW | OFlags::CLOEXEC,
        Mode::empty(),
    )?;
    Ok(File::from(fd))
}

/// Makes the new file `p`.
#[cfg(not(unix))]
fn new_file(p: &Path, _access: Access) -> Result<File, StagingError> {
    File::options()
        .write(true)
        .create_new(true)
        .open(p)
        .map_err(io(p))
}

/// Writes `bytes` to a new file `rel` (a relative path with `/`) inside `dir`, creating its
/// folders; an existing file — or a link, even one to nothing — is left as it is (`Ok(false)`).
/// For `templates dump`, which writes into a folder the user names rather than an output
/// folder. Nothing is written outside `dir`: a folder on the way that is a link is an error,
/// and the file is created only if nothing is at its name (no link is followed, not even one
/// planted in between). An error names the path that failed.
///
/// Atomic per file: the bytes go to a new temporary file in the same folder (`.NAME.XXXXXX.tmp`,
/// flushed to disk), which is then given the file's name only if that name is still free
/// (`renameat2` with `RENAME_NOREPLACE`, else a hard link, which fails on an existing name; by
/// `tempfile`'s `persist_noclobber`). So a full disk or a kill leaves either the whole file or
/// none at its name, never a part, and a file that appears meanwhile is never replaced. A
/// failed write removes its temporary file; only a process killed mid-write leaves one behind.
pub fn write_new_file(
    dir: &Path,
    rel: &str,
    bytes: &[u8],
) -> Result<bool, (PathBuf, std::io::Error)> {
    write_new_file_with(dir, rel, |f| f.write_all(bytes))
}

/// [`write_new_file`] with the contents written by `fill` (a test makes it fail mid-way).
fn write_new_file_with(
    dir: &Path,
    rel: &str,
    fill: impl FnOnce(&mut File) -> std::io::Result<()>,
) -> Result<bool, (PathBuf, std::io::Error)> {
    let path = dir.join(rel);
    if fs::symlink_metadata(&path).is_ok() {
        return Ok(false);
    }
    let mut folder = dir.to_path_buf();
    let folders: Vec<&str> = rel.split('/').collect();
    for name in &folders[..folders.len() - 1] {
        folder.push(name);
        match fs::symlink_metadata(&folder) {
            Ok(m) if m.is_dir() => {}
            Ok(_) => {
                return Err((
                    folder,
                    std::io::Error::other(
                        "is a link or a file, not a folder; nothing is written through it",
                    ),
                ));
            }
            Err(e) if e.kind() == std::io::ErrorKind::NotFound => {}
            Err(e) => return Err((folder, e)),
        }
    }
    let parent = path.parent().unwrap_or(dir);
    fs::create_dir_all(parent).map_err(|e| (parent.to_path_buf(), e))?;
    let file_name = path
        .file_name()
        .map(|n| n.to_string_lossy().into_owned())
        .unwrap_or_default();
    let prefix = format!(".{file_name}.");
    let mut builder = tempfile::Builder::new();
    builder.prefix(&prefix).suffix(".tmp");
    // The mode a plain new file gets (0666 less the umask), not the temporary file's 0600.
    #[cfg(unix)]
    builder.permissions(std::os::unix::fs::PermissionsExt::from_mode(0o666));
    let mut tmp = builder
        .tempfile_in(parent)
        .map_err(|e| (parent.to_path_buf(), e))?;
    // On an error the temporary file is removed when `tmp` is dropped.
    fill(tmp.as_file_mut())
        .and_then(|()| tmp.as_file().sync_all())
        .map_err(|e| (path.clone(), e))?;
    match tmp.persist_noclobber(&path) {
        Ok(_) => {}
        // Something took the name meanwhile: it is left as it is, and ours removed.
        Err(e) if e.error.kind() == std::io::ErrorKind::AlreadyExists => return Ok(false),
        Err(e) => return Err((path, e.error)),
    }
    // The new name itself on disk (best effort: not every file system can sync a folder).
    if let Ok(d) = File::open(parent) {
        let _ = d.sync_all();
    }
    Ok(true)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The names in `dir`, sorted.
    fn names(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        v.sort();
        v
    }

    /// `templates dump` wrote each file in place: a disk that filled (or a kill) half-way
    /// through left a template cut short under its own name, which the next dump skipped as
    /// "exists" and a program then used. A failed write now leaves no file at the name and no
    /// temporary file beside it.
    #[test]
    fn a_new_file_that_fails_mid_way_leaves_nothing() {
        let tmp = tempfile::tempdir().unwrap();
        let r = write_new_file_with(tmp.path(), "partials/style.hbs", |f| {
            f.write_all(b"<style>:root { --ink:")?;
            Err(std::io::Error::new(
                std::io::ErrorKind::StorageFull,
                "No space left on device",
            ))
        });
        let (path, e) = r.expect_err("the write failed");
        assert_eq!(path, tmp.path().join("partials/style.hbs"));
        assert_eq!(e.kind(), std::io::ErrorKind::StorageFull);
        assert_eq!(names(&tmp.path().join("partials")), Vec::<String>::new());
    }

    #[test]
    fn a_new_file_is_whole_leaves_no_temporary_file_and_never_replaces_one() {
        let tmp = tempfile::tempdir().unwrap();
        assert_eq!(
            write_new_file(tmp.path(), "a.hbs", b"new").map_err(|(p, e)| (p, e.kind())),
            Ok(true)
        );
        assert_eq!(fs::read(tmp.path().join("a.hbs")).unwrap(), b"new");
        assert_eq!(names(tmp.path()), ["a.hbs"]);
        // An existing file is left as it is.
        fs::write(tmp.path().join("b.hbs"), b"mine").unwrap();
        assert_eq!(
            write_new_file(tmp.path(), "b.hbs", b"new").map_err(|(p, e)| (p, e.kind())),
            Ok(false)
        );
        assert_eq!(fs::read(tmp.path().join("b.hbs")).unwrap(), b"mine");
        // A file that appears while ours is written is not replaced either, and ours is
        // removed (the name taken between the first look and the rename).
        let late = tmp.path().join("c.hbs");
        let r = write_new_file_with(tmp.path(), "c.hbs", |f| {
            fs::write(&late, b"theirs")?;
            f.write_all(b"new")
        });
        assert_eq!(r.map_err(|(p, e)| (p, e.kind())), Ok(false));
        assert_eq!(fs::read(&late).unwrap(), b"theirs");
        assert_eq!(names(tmp.path()), ["a.hbs", "b.hbs", "c.hbs"]);
        // A link planted the same way is not followed or replaced.
        #[cfg(unix)]
        {
            let target = tmp.path().join("target");
            let link = tmp.path().join("d.hbs");
            let r = write_new_file_with(tmp.path(), "d.hbs", |f| {
                std::os::unix::fs::symlink(&target, &link)?;
                f.write_all(b"new")
            });
            assert_eq!(r.map_err(|(p, e)| (p, e.kind())), Ok(false));
            assert!(
                fs::symlink_metadata(&link)
                    .unwrap()
                    .file_type()
                    .is_symlink()
            );
            assert!(!target.exists(), "nothing written through the link");
        }
    }

    /// A bind mount of a folder of the same file system shows only in the mount table, whose
    /// mount points write a space, tab or backslash as an octal escape.
    #[test]
    fn the_mount_table_names_mount_points_with_their_escapes() {
        let table = "22 1 8:1 / / rw,relatime shared:1 - ext4 /dev/sda1 rw\n\
                     95 22 8:1 /srv/out /data/monthly\\040reports rw - ext4 /dev/sda1 rw\n\
                     96 22 0:52 / /media/usb\\134x rw - vfat /dev/sdb1 rw\n";
        let listed = |p: &str| listed_in_mountinfo(table, Path::new(p));
        assert!(listed("/data/monthly reports"));
        assert!(listed("/media/usb\\x"));
        assert!(listed("/"));
        assert!(!listed("/data/monthly\\040reports"));
        assert!(!listed("/data/monthly"));
        assert!(
            !listed("/srv/out"),
            "the source of a bind mount is not a mount point"
        );
    }

    /// Clears the immutable flag on drop, so the test folder can be removed whatever happens.
    struct Immutable(PathBuf);

    impl Drop for Immutable {
        fn drop(&mut self) {
            let _ = std::process::Command::new("chattr")
                .arg("-i")
                .arg(&self.0)
                .status();
        }
    }

    /// An output of 60 top-level folders with one file each, and its manifest.
    /// A complete output `out` of a program `program` with a participants folder, in `dir`.
    fn target_in(dir: &Path) -> (OutputTarget, PathBuf) {
        let program = dir.join("program");
        fs::create_dir_all(program.join("participants")).unwrap();
        let out = dir.join("out");
        let target = OutputTarget {
            dir: out.clone(),
            program_root: program,
            participants_dir: "participants",
            program_id: "p".into(),
            templates: None,
            scope: OutputScope::Complete,
            named_by: "--out",
        };
        (target, out)
    }

    fn write_output(target: &OutputTarget) {
        staged_output(target).commit().unwrap();
    }

    /// An interrupt after an output had been put in place said "an output not yet put in
    /// place leaves the previous one as it was": nothing recorded that it had been. A run's
    /// swap and an import's moves now record the folder (read by [`abandon_staging`]); a
    /// staging folder removed without being put in place records nothing.
    #[test]
    fn outputs_put_in_place_are_recorded_for_an_interrupt() {
        let is_placed = |p: &Path| {
            PLACED
                .lock()
                .unwrap_or_else(|e| e.into_inner())
                .iter()
                .any(|x| x == p)
        };
        let tmp = tempfile::tempdir().unwrap();
        let (target, out) = target_in(tmp.path());
        let staging = Staging::begin(&target, Access::Owner).unwrap();
        let final_dir = staging.final_dir().to_path_buf();
        assert!(!is_placed(&final_dir));
        drop(staging);
        assert!(!is_placed(&final_dir), "removed, not put in place");
        write_output(&target);
        assert!(is_placed(&final_dir), "{out:?}");
        // An import: recorded only once its moves succeeded.
        let program = tmp.path().join("program");
        let base = program.join("participants");
        let failed =
            ImportStaging::create(&program.join(".a.staging"), &program.join("nowhere"), ".m")
                .unwrap();
        assert!(
            failed
                .finish(|| Err(std::io::Error::other("refused")))
                .is_err()
        );
        assert!(!is_placed(&program.join("nowhere")));
        let import = ImportStaging::create(&program.join(".b.staging"), &base, ".m").unwrap();
        import.finish(|| Ok(())).unwrap();
        assert!(is_placed(&base));
    }

    /// A commit that failed named the staging folder (`…/.out.staging/participants: No such
    /// file or directory`), which the run removes as it stops, and said nothing of the
    /// previous output. It names the output folder's path and says what became of it: a
    /// folder of staging gone before the sync, then a `.out.previous` in the way of the swap.
    #[test]
    fn a_commit_that_fails_names_the_output_folder_and_what_became_of_it() {
        let tmp = tempfile::tempdir().unwrap();
        let (target, out) = target_in(tmp.path());
        let shown = out.display().to_string();
        let fail_sync = || {
            let staging = Staging::begin(&target, Access::Owner).unwrap();
            staging.write("participants/a.html", b"x").unwrap();
            fs::remove_dir_all(staging.dir.join("participants")).unwrap();
            staging.commit().map(|_| ()).unwrap_err().to_string()
        };
        // A first run: nothing was written.
        let e = fail_sync();
        assert!(e.starts_with(&format!("{shown}/participants: ")), "{e}");
        assert!(
            e.ends_with(&format!("; nothing was written to {shown}")),
            "{e}"
        );
        assert!(!e.contains(".staging"), "{e}");
        assert!(!out.exists());
        // With an earlier output: left as it was.
        write_output(&target);
        let e = fail_sync();
        assert!(e.starts_with(&format!("{shown}/participants: ")), "{e}");
        assert!(
            e.ends_with(&format!(
                "; the previous outputs in {shown} were left as they were"
            )),
            "{e}"
        );
        assert!(out.join(MANIFEST).is_file() && out.join("f00/report.html").is_file());
        // The previous output cannot be moved aside: still in place, and said so.
        let staging = Staging::begin(&target, Access::Owner).unwrap();
        staging.write("participants/a.html", b"x").unwrap();
        let previous = tmp.path().join(".out.previous");
        fs::create_dir_all(previous.join("x")).unwrap();
        let e = staging.commit().map(|_| ()).unwrap_err().to_string();
        assert!(e.starts_with(&format!("{shown}: ")), "{e}");
        assert!(
            e.ends_with(&format!(
                "; the previous outputs in {shown} were left as they were"
            )),
            "{e}"
        );
        assert!(!e.contains(".staging"), "{e}");
        assert!(out.join(MANIFEST).is_file() && out.join("f00/report.html").is_file());
    }

    /// A run removes the previous output after the swap. Removed in the order the folder
    /// lists, a removal stopped part way (the process killed, a power cut, a file it cannot
    /// remove) could leave `.out.previous` without its manifest: "not a cohortpress output",
    /// and every later run refused to start until someone removed it by hand. A file made
    /// immutable (`chattr +i`: root only, skipped otherwise) in a folder listed after the
    /// manifest stops the removal part way; the manifest must still be there, and the next
    /// run must finish the removal.
    #[cfg(target_os = "linux")]
    #[test]
    fn a_removal_stopped_part_way_leaves_a_previous_output_that_is_still_ours() {
        let tmp = tempfile::tempdir().unwrap();
        let (target, out) = target_in(tmp.path());
        write_output(&target);
        let order: Vec<String> = fs::read_dir(&out)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .collect();
        let at = order.iter().position(|n| n == MANIFEST).unwrap();
        let Some(after) = order.get(at + 1) else {
            eprintln!("skipped: the manifest is listed last here");
            return;
        };
        let stuck = out.join(after).join("report.html");
        let made = std::process::Command::new("chattr")
            .arg("+i")
            .arg(&stuck)
            .status()
            .is_ok_and(|s| s.success());
        if !made {
            eprintln!("skipped: chattr +i needs root and a file system that supports it");
            return;
        }
        let guard = Immutable(
            tmp.path()
                .join(".out.previous")
                .join(after)
                .join("report.html"),
        );
        // The swap goes through; the previous copy cannot be removed in full.
        write_output(&target);
        let previous = tmp.path().join(".out.previous");
        assert!(previous.join(after).join("report.html").exists());
        assert!(previous.join(MANIFEST).is_file(), "the manifest goes last");
        assert!(is_our_folder(&previous));
        drop(guard);
        // The next run finishes the removal.
        write_output(&target);
        assert!(!previous.exists());
        assert_eq!(fs::read_dir(&out).unwrap().count(), 61);
    }

    /// The staging side of [`write_output`]: a staging folder holding 60 reports and a
    /// manifest that lists them, not yet put in place.
    fn staged_output(target: &OutputTarget) -> Staging {
        let staging = Staging::begin(target, Access::Owner).unwrap();
        for i in 0..60 {
            staging
                .write(&format!("f{i:02}/report.html"), b"x")
                .unwrap();
        }
        let outputs: Vec<_> = staging
            .files()
            .iter()
            .map(|f| serde_json::json!({ "path": f.path }))
            .collect();
        let manifest = serde_json::json!({
            "tool": "cohortpress test",
            "program_id": "p",
            "outputs": outputs,
        });
        staging
            .write(MANIFEST, manifest.to_string().as_bytes())
            .unwrap();
        staging
    }

    /// Every file under `dir`, as a sorted list of relative paths.
    #[cfg(unix)]
    fn tree(dir: &Path) -> Vec<String> {
        let mut v: Vec<String> = walkdir::WalkDir::new(dir)
            .min_depth(1)
            .into_iter()
            .map(|e| {
                let e = e.unwrap();
                e.path().strip_prefix(dir).unwrap().display().to_string()
            })
            .collect();
        v.sort();
        v
    }

    /// An output folder moved to an archive while a run went on, with a link left in its
    /// place (release run, attack24): the commit moved the link aside as `.out.previous`, read
    /// the archived output through it as "ours", and removed everything the link led to (the
    /// log said only that `.out.previous` "could not be removed yet: Not a directory"). Now
    /// the link is put back untouched, the run fails, and the archive keeps all its files.
    #[cfg(unix)]
    #[test]
    fn an_output_folder_swapped_for_a_link_is_never_followed_to_be_removed() {
        let tmp = tempfile::tempdir().unwrap();
        let (target, out) = target_in(tmp.path());
        write_output(&target);
        let staging = staged_output(&target);
        let archive = tmp.path().join("archive");
        fs::create_dir(&archive).unwrap();
        fs::rename(&out, archive.join("may")).unwrap();
        std::os::unix::fs::symlink("archive/may", &out).unwrap();
        let before = tree(&archive);
        assert_eq!(
            before.len(),
            1 + 60 + 60 + 1,
            "may, 60 folders, 60 reports, a manifest"
        );
        let err = staging.commit().unwrap_err().to_string();
        assert!(err.contains("no longer a folder"), "{err}");
        assert_eq!(tree(&archive), before, "the archived output is whole");
        assert!(fs::symlink_metadata(&out).unwrap().file_type().is_symlink());
        assert!(!tmp.path().join(".out.previous").exists());
    }

    /// A staging folder swapped for a link while the run went on: given a path, the removal
    /// of a failed or interrupted run's staging folder (SIGTERM) followed the link and removed
    /// everything in the folder it led to (a user's notes; release run, attack24), and a
    /// commit would have put the link in place as the output. Now neither follows it: the
    /// commit refuses a staging folder that is not the one the run made, and the removal
    /// refuses a link, so the linked folder keeps its files.
    #[cfg(unix)]
    #[test]
    fn a_staging_folder_swapped_for_a_link_is_never_followed() {
        let tmp = tempfile::tempdir().unwrap();
        let (target, _out) = target_in(tmp.path());
        let docs = tmp.path().join("docs");
        fs::create_dir(&docs).unwrap();
        for i in 0..3 {
            fs::write(docs.join(format!("note{i}.txt")), "kept").unwrap();
        }
        let staging = staged_output(&target);
        let dir = tmp.path().join(".out.staging");
        fs::rename(&dir, tmp.path().join("moved")).unwrap();
        std::os::unix::fs::symlink("docs", &dir).unwrap();
        let err = staging.commit().unwrap_err().to_string();
        assert!(err.contains("staging folder was replaced"), "{err}");
        assert_eq!(tree(&docs), ["note0.txt", "note1.txt", "note2.txt"]);
        // An interrupt's removal and a failed run's drop take the same way.
        let err = remove_ours(&dir, STAGING_MARKER).unwrap_err().to_string();
        assert!(err.contains("symbolic link"), "{err}");
        assert_eq!(tree(&docs), ["note0.txt", "note1.txt", "note2.txt"]);
        assert!(fs::symlink_metadata(&dir).unwrap().file_type().is_symlink());
    }

    /// Files were made in staging by path: with `.out.staging` swapped for a link while the run
    /// went on (attack24), every later file at the staging folder's top level (the manifest,
    /// the tidy tables) was made in the folder the link led to, and a report's folder made
    /// anew there. They are now made through the handle the run opened as it made its staging
    /// folder: they land in the run's own folder wherever it was moved, and the link's folder
    /// gets nothing. A link planted inside staging in place of one of its folders is not
    /// followed either; that write fails, naming the file.
    #[cfg(unix)]
    #[test]
    fn files_are_made_in_the_runs_own_staging_folder_never_through_a_link() {
        let tmp = tempfile::tempdir().unwrap();
        let (target, _out) = target_in(tmp.path());
        let docs = tmp.path().join("docs");
        fs::create_dir(&docs).unwrap();
        fs::write(docs.join("note.txt"), "kept").unwrap();
        let staging = Staging::begin(&target, Access::Owner).unwrap();
        staging.write("participants/a.html", b"a").unwrap();
        let dir = tmp.path().join(".out.staging");
        let moved = tmp.path().join("moved");
        fs::rename(&dir, &moved).unwrap();
        std::os::unix::fs::symlink("docs", &dir).unwrap();
        staging.write("manifest.json", b"{}").unwrap();
        staging.write("participants/b.html", b"b").unwrap();
        staging.write("metrics/tables.csv", b"t").unwrap();
        assert_eq!(staging.read("participants/b.html").unwrap(), b"b");
        assert_eq!(tree(&docs), ["note.txt"]);
        assert_eq!(
            tree(&moved),
            [
                ".cohortpress-staging",
                "manifest.json",
                "metrics",
                "metrics/tables.csv",
                "participants",
                "participants/a.html",
                "participants/b.html",
            ]
        );
        // A folder inside staging swapped for a link.
        fs::rename(moved.join("metrics"), tmp.path().join("metrics-moved")).unwrap();
        std::os::unix::fs::symlink(&docs, moved.join("metrics")).unwrap();
        let err = staging
            .write("metrics/more.csv", b"m")
            .unwrap_err()
            .to_string();
        assert!(err.contains("not a folder"), "{err}");
        assert!(err.contains("metrics/more.csv"), "{err}");
        let err = staging.read("metrics/tables.csv").unwrap_err().to_string();
        assert!(err.contains("not a folder"), "{err}");
        assert_eq!(tree(&docs), ["note.txt"]);
        let err = staging.commit().unwrap_err().to_string();
        assert!(err.contains("staging folder was replaced"), "{err}");
    }

    /// A folder listing quoted in a refusal quoted each path whole: an output holding a chain
    /// of nested folders (attack24: 20,000 levels) printed a message of tens of thousands of
    /// characters. A quoted path now keeps its first and last 60 characters.
    #[test]
    fn a_refusal_quotes_a_long_path_by_its_two_ends() {
        let tmp = tempfile::tempdir().unwrap();
        let mut deep = tmp.path().to_path_buf();
        for _ in 0..300 {
            deep.push("abcd");
        }
        fs::create_dir_all(&deep).unwrap();
        fs::write(deep.join("last.txt"), "x").unwrap();
        let why = unlisted_files(tmp.path(), MANIFEST, &Default::default()).unwrap();
        assert!(why.len() < 600, "{} characters: {why}", why.len());
        assert!(why.contains("`abcd/abcd/"), "{why}");
        assert!(why.contains("more characters) …"), "{why}");
        assert!(why.contains("/abcd/last.txt`"), "{why}");
    }

    /// Folders made read-only after the fact (a backup tool, `chmod -R a-w`), down to mode
    /// 000, are still removed whole when they are ours, through their handles.
    #[cfg(unix)]
    #[test]
    fn a_previous_output_made_read_only_is_removed_whole() {
        use std::os::unix::fs::PermissionsExt;
        let tmp = tempfile::tempdir().unwrap();
        let (target, out) = target_in(tmp.path());
        write_output(&target);
        fs::set_permissions(out.join("f03"), fs::Permissions::from_mode(0o000)).unwrap();
        fs::set_permissions(out.join("f07"), fs::Permissions::from_mode(0o500)).unwrap();
        fs::set_permissions(&out, fs::Permissions::from_mode(0o500)).unwrap();
        let moved = tmp.path().join("old");
        fs::rename(&out, &moved).unwrap();
        remove_ours(&moved, MANIFEST).unwrap();
        assert!(!moved.exists());
    }
}

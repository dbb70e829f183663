//! Atomic output: a staging folder beside the output folder, a run lock, and the manifest.
//!
//! A run writes everything into `.NAME.staging/` next to the output folder `NAME/`, then swaps
//! it into place with two renames (`NAME` → `.NAME.previous`, staging → `NAME`) and removes the
//! previous copy. A run killed before the swap leaves `NAME/` untouched; a run killed between the
//! two renames leaves `.NAME.previous/`, which the next run restores before it starts. The lock
//! is an OS advisory lock on `.NAME.lock` (`File::try_lock`), so a lock left by a crashed run
//! never blocks the next one: the OS releases it when the process dies.

use crate::participant::InputFile;
use crate::runner::{RunPlan, RunSummary};
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
    /// An I/O error, with the path.
    #[error("{path}: {source}")]
    Io {
        /// The path.
        path: String,
        /// The error.
        source: std::io::Error,
    },
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

/// A staging folder being filled; [`Staging::commit`] swaps it into place.
pub struct Staging {
    access: Access,
    final_dir: PathBuf,
    dir: PathBuf,
    previous: PathBuf,
    written: Mutex<Vec<OutputFile>>,
    _lock: File,
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
        let n = self.out.write(buf)?;
        self.hasher.update(&buf[..n]);
        self.bytes += n as u64;
        Ok(n)
    }

    fn flush(&mut self) -> std::io::Result<()> {
        self.out.flush()
    }
}

impl StagingFile<'_> {
    /// Flushes the file and records it (path, blake3, size) among the staged outputs.
    pub fn finish(mut self) -> Result<OutputFile, StagingError> {
        self.out.flush().map_err(|source| StagingError::Io {
            path: self.rel.clone(),
            source,
        })?;
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

impl Staging {
    /// Takes the lock for `out_dir` and prepares an empty owner-only staging folder beside it.
    pub fn begin(out_dir: &Path) -> Result<Staging, StagingError> {
        Self::begin_with(out_dir, Access::Owner)
    }

    /// [`Staging::begin`] with the given access for everything it creates.
    pub fn begin_with(out_dir: &Path, access: Access) -> Result<Staging, StagingError> {
        let name = out_dir
            .file_name()
            .map(|n| n.to_string_lossy().into_owned())
            .unwrap_or_else(|| "reports".into());
        let parent = match out_dir.parent() {
            Some(p) if !p.as_os_str().is_empty() => p.to_path_buf(),
            _ => PathBuf::from("."),
        };
        fs::create_dir_all(&parent).map_err(io(&parent))?;
        let lock_path = parent.join(format!(".{name}.lock"));
        let lock = File::options()
            .create(true)
            .truncate(false)
            .write(true)
            .open(&lock_path)
            .map_err(io(&lock_path))?;
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
        let dir = parent.join(format!(".{name}.staging"));
        let previous = parent.join(format!(".{name}.previous"));
        // A run killed between the two renames of a commit left the complete previous output
        // here: put it back before anything else.
        if previous.exists() && !out_dir.exists() {
            fs::rename(&previous, out_dir).map_err(io(out_dir))?;
        } else if previous.exists() {
            fs::remove_dir_all(&previous).map_err(io(&previous))?;
        }
        // Staging left by a killed run: we hold the lock, so nobody else is using it.
        if dir.exists() {
            fs::remove_dir_all(&dir).map_err(io(&dir))?;
        }
        create_dir(&dir, access)?;
        Ok(Staging {
            access,
            final_dir: out_dir.to_path_buf(),
            dir,
            previous,
            written: Mutex::new(Vec::new()),
            _lock: lock,
        })
    }

    /// Writes `bytes` to `rel` (a relative path with `/`) inside staging. Safe to call from
    /// several threads.
    pub fn write(&self, rel: &str, bytes: &[u8]) -> Result<OutputFile, StagingError> {
        let mut f = self.create(rel)?;
        f.write_all(bytes).map_err(|source| StagingError::Io {
            path: rel.to_string(),
            source,
        })?;
        f.finish()
    }

    /// [`Staging::write`], but owner-only (folder 0700, file 0600) whatever the run's access:
    /// for identified outputs such as the clinician follow-up list.
    pub fn write_private(&self, rel: &str, bytes: &[u8]) -> Result<OutputFile, StagingError> {
        let mut f = self.create_with(rel, Access::Owner)?;
        f.write_all(bytes).map_err(|source| StagingError::Io {
            path: rel.to_string(),
            source,
        })?;
        f.finish()
    }

    /// Reads back a file written into staging (a participant's partial result).
    pub fn read(&self, rel: &str) -> Result<Vec<u8>, StagingError> {
        let path = self.dir.join(rel);
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
        if let Some(p) = path.parent()
            && !p.exists()
        {
            create_dir(p, access)?;
        }
        let file = new_file(&path, access)?;
        Ok(StagingFile {
            staging: self,
            rel: rel.to_string(),
            out: std::io::BufWriter::with_capacity(1 << 16, file),
            hasher: blake3::Hasher::new(),
            bytes: 0,
        })
    }

    /// The output folder this staging folder will replace (its current content is the
    /// previous complete output, if any).
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
    /// there) and releases the lock.
    pub fn commit(self) -> Result<OutputSet, StagingError> {
        let files = self.files().len();
        sync_dir(&self.dir);
        if self.final_dir.exists() {
            fs::rename(&self.final_dir, &self.previous).map_err(io(&self.final_dir))?;
        }
        fs::rename(&self.dir, &self.final_dir).map_err(io(&self.final_dir))?;
        if self.previous.exists() {
            fs::remove_dir_all(&self.previous).map_err(io(&self.previous))?;
        }
        Ok(OutputSet { files })
    }
}

fn sync_dir(dir: &Path) {
    // Best effort: make the directory entries durable before the swap.
    if let Ok(f) = File::open(dir) {
        let _ = f.sync_all();
    }
}

#[cfg(unix)]
fn create_dir(p: &Path, access: Access) -> Result<(), StagingError> {
    use std::os::unix::fs::DirBuilderExt;
    fs::DirBuilder::new()
        .recursive(true)
        .mode(access.dir_mode())
        .create(p)
        .map_err(io(p))
}

#[cfg(not(unix))]
fn create_dir(p: &Path, _access: Access) -> Result<(), StagingError> {
    fs::create_dir_all(p).map_err(io(p))
}

#[cfg(unix)]
fn new_file(p: &Path, access: Access) -> Result<File, StagingError> {
    use std::os::unix::fs::OpenOptionsExt;
    File::options()
        .write(true)
        .create_new(true)
        .mode(access.file_mode())
        .open(p)
        .map_err(io(p))
}

#[cfg(not(unix))]
fn new_file(p: &Path, _access: Access) -> Result<File, StagingError> {
    File::options()
        .write(true)
        .create_new(true)
        .open(p)
        .map_err(io(p))
}

#[derive(Serialize)]
struct Manifest<'a> {
    tool: String,
    program_id: &'a str,
    period_from: String,
    period_to: String,
    as_of: String,
    formats: Vec<String>,
    modules: Vec<String>,
    counts: &'a RunSummary,
    inputs: &'a [InputFile],
    outputs: Vec<OutputFile>,
}

/// The run manifest (JSON): tool version, settings, input hashes, every output with its
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
        period_from: plan.period.from.to_string(),
        period_to: plan.period.to.to_string(),
        as_of: plan.as_of.to_string(),
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

//! Size limits on input files, checked before a file is read.
//!
//! Every input is read whole into memory, so a huge file (a runaway export, a file of the
//! wrong kind dropped into a participant folder, or a hostile one) could exhaust memory. The
//! limits are far above any real participant's data: a CSV of 64 MiB holds well over a million
//! daily rows, and a profile or program file is a few kilobytes. They are documented in the
//! docs/GUIDE.md ("Unattended runs, shards and scheduling").

use std::io::Read;
use std::path::Path;

/// Largest CSV input file read, in bytes (64 MiB).
pub const MAX_CSV_BYTES: u64 = 64 * 1024 * 1024;
/// Largest YAML input file read (`program.yaml`, `profile.yaml`), in bytes (1 MiB).
pub const MAX_YAML_BYTES: u64 = 1024 * 1024;

/// Deepest nesting of lists and mappings in a YAML file (a profile nests 2 levels, a program 5).
pub const MAX_YAML_DEPTH: usize = 32;
/// Most YAML events (scalars, list and mapping starts and ends) in one file.
pub const MAX_YAML_EVENTS: u64 = 100_000;
/// Most aliases (`*name`) in one YAML file.
pub const MAX_YAML_ALIASES: u64 = 1_000;
/// Most YAML events once every alias is expanded (what the deserializer really walks).
pub const MAX_YAML_EXPANDED: u64 = 200_000;

/// Most table cells and series points, together, in one external module's `result` for one
/// participant. Each value is held, with its names, until the run's tidy files are written
/// (about 400 bytes in all; measured: 700,000-row tables from a module that fits its 16 MiB
/// of output took 1.9 GB for two participants), so without a ceiling a module could exhaust
/// memory for the whole run. A daily series over the longest program (3,653 days) and a table of
/// 25 figures per day still fit.
pub const MAX_MODULE_RESULT_VALUES: usize = 100_000;

/// Most data rows read from one CSV file (over 130 years of daily rows; a file over it is
/// refused, the participant left out, and reading stops there).
pub const MAX_CSV_ROWS: usize = 50_000;
/// Most columns in a CSV header (an input file has at most 6 known columns; extra columns
/// from an export are ignored with a warning, up to this many).
pub const MAX_CSV_COLUMNS: usize = 256;
/// Longest CSV field, in bytes (a note or a label; longer rows are dropped with a warning).
pub const MAX_CSV_FIELD_BYTES: usize = 4096;
/// Longest CSV field read at all, in bytes (1 MiB, 256 times [`MAX_CSV_FIELD_BYTES`]): a file
/// holding a longer one (a quote never closed, a file without line ends or delimiters) is
/// refused at that field's line and column before it is parsed. The CSV reader gathers a field
/// whole before it can be judged, and a 60 MB single-field file made `check` peak at 320 MB.
pub const MAX_CSV_FIELD_READ_BYTES: usize = 1024 * 1024;
/// Longest program, from `program.start` to `program.end`, in days (10 years with their leap
/// days; common practice: weight-management programs and their maintenance follow-up run for
/// months to a few years). Every report and figure has a row per week since enrolment, so a
/// typo in a year (`start: 1950-01-01`) made a 48-person run take 90 s and 1.5 GB over
/// decades of empty weeks; such a program is refused at `program.end`.
pub const MAX_PROGRAM_DAYS: i64 = 3653;
/// Most `report.group_by` keys. The group phase (complementary suppression and the audit of
/// every section's counts) grows far faster than the number of sections: measured on a
/// 12-person demo program, 5 keys took up to 8 s, 6 keys 86 s, and 2,000 keys reached 22 GB
/// before the system killed the run (a program choice: a sponsor report splits by a few
/// attributes).
pub const MAX_GROUP_BY_KEYS: usize = 5;
/// Most worker threads a run starts (`--jobs`): each is a thread with its own stack, and a
/// typo (`--jobs 1000000`) made the run spend a minute creating threads until memory ran out,
/// then abort (common practice: far above the cores of any machine this runs on).
pub const MAX_JOBS: usize = 512;
/// Longest text of one part of a diagnostic (message, expected, found, hint), in characters;
/// the rest is counted, not kept (a quoted header or a list of line numbers can be megabytes).
pub const MAX_DIAGNOSTIC_TEXT_CHARS: usize = 1000;
/// Diagnostics of one kind kept per file; the rest are counted in one summary line.
pub const MAX_DIAGNOSTICS_PER_KIND: usize = 20;

/// The limit for a file, by its extension: YAML files get [`MAX_YAML_BYTES`], everything else
/// [`MAX_CSV_BYTES`].
pub fn limit_for(path: &Path) -> u64 {
    match path.extension().and_then(|e| e.to_str()) {
        Some(e) if e.eq_ignore_ascii_case("yaml") || e.eq_ignore_ascii_case("yml") => {
            MAX_YAML_BYTES
        }
        _ => MAX_CSV_BYTES,
    }
}

/// Human size: `64 MiB`, `1.5 MiB`, `900 KiB`, `12 bytes`.
pub fn human(bytes: u64) -> String {
    const KIB: f64 = 1024.0;
    let b = bytes as f64;
    if b >= KIB * KIB {
        let m = b / (KIB * KIB);
        if m.fract() == 0.0 {
            format!("{m:.0} MiB")
        } else {
            format!("{m:.1} MiB")
        }
    } else if b >= KIB {
        format!("{:.0} KiB", b / KIB)
    } else {
        format!("{bytes} bytes")
    }
}

/// The message for a file over its limit. Only a CSV file holds a history that can be split
/// into years; a YAML file (`program.yaml`, a `profile.yaml`) over its limit is the wrong file
/// (it read "split a very long history into the reporting years" too).
pub fn too_large_message(size: u64, limit: u64) -> String {
    format!(
        "the file is {} ({} bytes), larger than the limit of {} for this kind of file; it was not read \
         (check it is the right file{})",
        human(size),
        size,
        human(limit),
        if limit == MAX_CSV_BYTES {
            "; split a very long history into the reporting years"
        } else {
            ""
        }
    )
}

/// Opens an input file for reading without following a link, and refuses anything that is
/// not a regular file.
///
/// On Unix the file is opened with `O_NOFOLLOW` (a symbolic link as the last path component
/// fails instead of being followed) and `O_NONBLOCK` (opening a FIFO never waits for a writer);
/// the type is then checked on the opened handle (`fstat`), so nothing can swap the file between
/// the check and the read. A link, a FIFO, a device, a socket or a folder gives an error whose
/// message says what was found; nothing is read from it.
pub fn open_input(path: &Path) -> std::io::Result<std::fs::File> {
    #[cfg(unix)]
    {
        let fd = rustix::fs::open(path, input_flags(), rustix::fs::Mode::empty());
        checked_file(fd.map_err(|e| {
            described(e, || {
                let t = std::fs::symlink_metadata(path).ok()?.file_type();
                (!t.is_file()).then(|| NotAFile::of_type(&t))
            })
        }))
    }
    #[cfg(not(unix))]
    {
        if is_link(path) {
            return Err(NotAFile::LINK.into());
        }
        checked_file(std::fs::File::open(path))
    }
}

/// Opens (creating it, owner-only, if missing) a lock file: the run's lock beside its output
/// folder, the ledger's in its folder. The file is only locked, never written, but open with
/// create-and-write follows a link planted under its name, and would create a file wherever a
/// dangling one points (outside the output folder, in a shared folder anyone can write to).
/// So, as an input, it is opened with `O_NOFOLLOW` and `O_NONBLOCK` (a FIFO never makes the
/// run wait) and must be a regular file; a link gives an error that says so.
pub fn open_lock_file(path: &Path) -> std::io::Result<std::fs::File> {
    #[cfg(unix)]
    {
        use rustix::fs::{Mode, OFlags};
        let flags = OFlags::WRONLY
            | OFlags::CREATE
            | OFlags::NOFOLLOW
            | OFlags::NONBLOCK
            | OFlags::NOCTTY
            | OFlags::CLOEXEC;
        let fd = rustix::fs::open(path, flags, Mode::from_raw_mode(0o600));
        checked_file(fd.map_err(|e| {
            let e = std::io::Error::from(e);
            match std::fs::symlink_metadata(path) {
                Ok(m) if m.file_type().is_symlink() => {
                    std::io::Error::new(e.kind(), LOCK_LINK_MESSAGE)
                }
                // A FIFO without a reader fails with ENXIO, which says nothing to a reader.
                Ok(m) if !m.is_file() => {
                    std::io::Error::new(e.kind(), not_a_file_message(&m.file_type()))
                }
                _ => e,
            }
        }))
    }
    #[cfg(not(unix))]
    {
        if is_link(path) {
            return Err(std::io::Error::other(LOCK_LINK_MESSAGE));
        }
        checked_file(
            std::fs::File::options()
                .create(true)
                .truncate(false)
                .write(true)
                .open(path),
        )
    }
}

/// Why a lock file that is a link is not opened.
pub const LOCK_LINK_MESSAGE: &str = "it is a symbolic link, and a lock file is never opened \
    through one (it would create or open a file wherever the link points); remove the link";

/// A participant's folder, opened once without following a link: its files are opened relative
/// to it ([`read_input_in`]), so a folder swapped for a link while the run goes on is not
/// followed either.
#[derive(Debug)]
pub struct InputDir {
    #[cfg(unix)]
    fd: std::os::fd::OwnedFd,
    #[cfg_attr(unix, allow(dead_code))]
    path: std::path::PathBuf,
}

/// Opens a folder of inputs without following a link (`O_DIRECTORY | O_NOFOLLOW`).
pub fn open_dir(path: &Path) -> std::io::Result<InputDir> {
    #[cfg(unix)]
    {
        use rustix::fs::OFlags;
        let flags = OFlags::RDONLY | OFlags::DIRECTORY | OFlags::NOFOLLOW | OFlags::CLOEXEC;
        let fd = rustix::fs::open(path, flags, rustix::fs::Mode::empty())
            .map_err(|e| link_or(e, || is_link(path)))?;
        Ok(InputDir {
            fd,
            path: path.to_path_buf(),
        })
    }
    #[cfg(not(unix))]
    {
        if is_link(path) || !path.is_dir() {
            return Err(NotAFile::LINK.into());
        }
        Ok(InputDir {
            path: path.to_path_buf(),
        })
    }
}

/// Reads the file `name` of `dir` like [`read_input`] (no links, regular files only, size
/// limit by the name's extension), opened relative to the folder's handle.
pub fn read_input_in(dir: &InputDir, name: &str) -> std::io::Result<Vec<u8>> {
    let limit = limit_for(Path::new(name));
    #[cfg(unix)]
    let f = {
        let fd = rustix::fs::openat(&dir.fd, name, input_flags(), rustix::fs::Mode::empty());
        checked_file(fd.map_err(|e| {
            described(e, || {
                use rustix::fs::FileType as T;
                let st = rustix::fs::statat(&dir.fd, name, rustix::fs::AtFlags::SYMLINK_NOFOLLOW)
                    .ok()?;
                let found = match T::from_raw_mode(st.st_mode) {
                    T::Symlink => return Some(NotAFile::LINK),
                    T::RegularFile => return None,
                    T::Fifo => "a FIFO (named pipe)",
                    T::CharacterDevice | T::BlockDevice => "a device",
                    T::Socket => "a socket",
                    T::Directory => "a folder",
                    T::Unknown => "a special file",
                };
                Some(NotAFile { found, link: false })
            })
        }))?
    };
    #[cfg(not(unix))]
    let f = open_input(&dir.path.join(name))?;
    read_open(f, limit)
}

/// The names in `dir`, read through its handle (so from the folder that was opened, whatever
/// its path leads to now), and whether every entry could be read.
pub fn list_dir(dir: &InputDir) -> std::io::Result<(Vec<String>, bool)> {
    let mut names = Vec::new();
    let mut complete = true;
    #[cfg(unix)]
    for entry in rustix::fs::Dir::read_from(&dir.fd)? {
        match entry {
            Ok(e) => {
                let name = e.file_name().to_string_lossy();
                if name != "." && name != ".." {
                    names.push(name.into_owned());
                }
            }
            Err(_) => complete = false,
        }
    }
    #[cfg(not(unix))]
    for entry in std::fs::read_dir(&dir.path)? {
        match entry {
            Ok(e) => names.push(e.file_name().to_string_lossy().into_owned()),
            Err(_) => complete = false,
        }
    }
    Ok((names, complete))
}

#[cfg(unix)]
fn input_flags() -> rustix::fs::OFlags {
    use rustix::fs::OFlags;
    OFlags::RDONLY | OFlags::NOFOLLOW | OFlags::NONBLOCK | OFlags::NOCTTY | OFlags::CLOEXEC
}

/// An open error in words when the path is a link (`O_NOFOLLOW` fails with `ELOOP`; the kind
/// of error is kept).
#[cfg(unix)]
fn link_or(e: rustix::io::Errno, is_link: impl FnOnce() -> bool) -> std::io::Error {
    described(e, || is_link().then_some(NotAFile::LINK))
}

/// An open error in the words `what` gives for the entry that could not be opened (a link: `O_NOFOLLOW` fails
/// with `ELOOP`; a socket: opening one fails with `ENXIO`, "No such device or address", which
/// told a reader nothing); the kind of error is kept.
#[cfg(unix)]
fn described(e: rustix::io::Errno, what: impl FnOnce() -> Option<NotAFile>) -> std::io::Error {
    let e = std::io::Error::from(e);
    if e.kind() == std::io::ErrorKind::NotFound {
        return e;
    }
    match what() {
        Some(m) => std::io::Error::new(e.kind(), m),
        None => e,
    }
}

fn is_link(path: &Path) -> bool {
    std::fs::symlink_metadata(path).is_ok_and(|m| m.file_type().is_symlink())
}

/// The opened handle as a `File` when it is a regular file.
fn checked_file<F: Into<std::fs::File>>(
    opened: std::io::Result<F>,
) -> std::io::Result<std::fs::File> {
    let f: std::fs::File = opened?.into();
    let meta = f.metadata()?;
    if !meta.is_file() {
        return Err(NotAFile::of_type(&meta.file_type()).into());
    }
    Ok(f)
}

/// An input refused for what it is: a symbolic link, or something else that is not a regular
/// file (a folder, a FIFO, a device, a socket). The payload of the `io::Error` the input
/// readers give ([`NotAFile::of`] finds it), so that a message can say what was expected and
/// what was found: "cannot read the file (it is a folder, not a regular file; nothing was read
/// from it (put the file itself here))" had neither, in parentheses within parentheses.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct NotAFile {
    /// What was found: "a folder", "a FIFO (named pipe)", "a symbolic link".
    pub found: &'static str,
    /// Whether it is a link (refused for where it could lead, not for what it is).
    pub link: bool,
}

impl NotAFile {
    /// A symbolic link.
    pub const LINK: NotAFile = NotAFile {
        found: "a symbolic link",
        link: true,
    };

    /// The entry of type `t`, which is not a regular file.
    pub fn of_type(t: &std::fs::FileType) -> NotAFile {
        if t.is_symlink() {
            NotAFile::LINK
        } else {
            NotAFile {
                found: kind_of(t),
                link: false,
            }
        }
    }

    /// The refusal an input reader's error carries, if it is one.
    pub fn of(e: &std::io::Error) -> Option<NotAFile> {
        e.get_ref()?.downcast_ref::<NotAFile>().copied()
    }

    /// What it is and that nothing was read, without what to do: "it is a folder, not a
    /// regular file; nothing was read from it".
    pub fn sentence(&self) -> String {
        if self.link {
            "it is a symbolic link, and links are not followed, as one could point at another \
             participant's data or at a system file; nothing was read through it"
                .to_string()
        } else {
            format!(
                "it is {}, not a regular file; nothing was read from it",
                self.found
            )
        }
    }

    /// What to do about it.
    pub const HINT: &'static str = "put the file itself here";
}

impl std::fmt::Display for NotAFile {
    /// One sentence without parentheses of its own, since callers put it in theirs.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}; {}", self.sentence(), Self::HINT)
    }
}

impl std::error::Error for NotAFile {}

impl From<NotAFile> for std::io::Error {
    fn from(n: NotAFile) -> std::io::Error {
        let kind = if n.link {
            std::io::ErrorKind::Other
        } else {
            std::io::ErrorKind::InvalidInput
        };
        std::io::Error::new(kind, n)
    }
}

/// Why something that is not a regular file is not read ([`NotAFile`] in words).
pub fn not_a_file_message(t: &std::fs::FileType) -> String {
    NotAFile::of_type(t).to_string()
}

/// "a folder", "a FIFO (named pipe)", … for a file type.
pub fn kind_of(t: &std::fs::FileType) -> &'static str {
    #[cfg(unix)]
    {
        use std::os::unix::fs::FileTypeExt;
        if t.is_fifo() {
            return "a FIFO (named pipe)";
        }
        if t.is_char_device() || t.is_block_device() {
            return "a device";
        }
        if t.is_socket() {
            return "a socket";
        }
    }
    if t.is_symlink() {
        "a symbolic link"
    } else if t.is_dir() {
        "a folder"
    } else if t.is_file() {
        "a regular file"
    } else {
        "a special file"
    }
}

/// Reads a whole input file, refusing it before reading when it is over its limit
/// ([`limit_for`]). The file is opened read-only through [`open_input`] (no links, regular files
/// only). The size is checked on the open file and the read is capped, so a file that grows
/// while it is read is still refused.
pub fn read_input(path: &Path) -> std::io::Result<Vec<u8>> {
    read_limited(path, limit_for(path))
}

/// Whether `e` is [`read_limited`]'s refusal of a file over its limit (its message is
/// [`too_large_message`]).
pub fn is_over_limit(e: &std::io::Error) -> bool {
    e.kind() == std::io::ErrorKind::Other && e.to_string().contains(", larger than the limit of ")
}

/// [`read_input`] with an explicit limit.
pub fn read_limited(path: &Path, limit: u64) -> std::io::Result<Vec<u8>> {
    read_open(open_input(path)?, limit)
}

/// Reads an opened input, refusing it when over `limit` (checked on the handle first, and the
/// read capped, so a file that grows while it is read is still refused).
fn read_open(f: std::fs::File, limit: u64) -> std::io::Result<Vec<u8>> {
    let size = f.metadata()?.len();
    if size > limit {
        return Err(std::io::Error::other(too_large_message(size, limit)));
    }
    let mut buf = Vec::with_capacity(size as usize);
    f.take(limit + 1).read_to_end(&mut buf)?;
    if buf.len() as u64 > limit {
        return Err(std::io::Error::other(too_large_message(
            buf.len() as u64,
            limit,
        )));
    }
    Ok(buf)
}

/// Checks a file's size without reading it (for `program.yaml`, before the program loader
/// reads it). `Ok` when the file is within its limit or cannot be examined (the loader then
/// reports why it cannot be read). Links are not followed.
pub fn check_size(path: &Path) -> Result<(), String> {
    match std::fs::symlink_metadata(path) {
        Ok(m) if m.is_file() && m.len() > limit_for(path) => {
            Err(too_large_message(m.len(), limit_for(path)))
        }
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Only a CSV file's message says to split a history into years (attack22: a 5 MB
    /// program.yaml was told to).
    #[test]
    fn only_a_csv_file_is_told_to_split_its_history() {
        assert_eq!(
            too_large_message(5_001_848, MAX_YAML_BYTES),
            "the file is 4.8 MiB (5001848 bytes), larger than the limit of 1 MiB for this kind \
             of file; it was not read (check it is the right file)"
        );
        assert!(
            too_large_message(MAX_CSV_BYTES + 1, MAX_CSV_BYTES).ends_with(
                "(check it is the right file; split a very long history into the reporting years)"
            )
        );
    }

    #[test]
    fn limits_by_extension() {
        assert_eq!(limit_for(Path::new("a/profile.yaml")), MAX_YAML_BYTES);
        assert_eq!(limit_for(Path::new("a/b.YML")), MAX_YAML_BYTES);
        assert_eq!(limit_for(Path::new("a/weights.csv")), MAX_CSV_BYTES);
    }

    #[test]
    fn human_sizes() {
        assert_eq!(human(MAX_CSV_BYTES), "64 MiB");
        assert_eq!(human(3 * 1024 * 1024 / 2), "1.5 MiB");
        assert_eq!(human(2048), "2 KiB");
        assert_eq!(human(12), "12 bytes");
    }

    #[test]
    fn oversized_yaml_is_refused_and_small_one_read() {
        let dir = tempfile::tempdir().unwrap();
        let big = dir.path().join("profile.yaml");
        std::fs::write(&big, vec![b'#'; MAX_YAML_BYTES as usize + 1]).unwrap();
        let e = read_input(&big).unwrap_err();
        assert!(
            e.to_string().contains("larger than the limit of 1 MiB"),
            "{e}"
        );
        assert!(check_size(&big).is_err());
        let small = dir.path().join("weights.csv");
        std::fs::write(&small, b"date,weight,unit\n").unwrap();
        assert_eq!(read_input(&small).unwrap(), b"date,weight,unit\n");
        assert!(check_size(&small).is_ok());
    }
}

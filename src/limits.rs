//! Size limits on input files, checked before a file is read.
//!
//! Every input is read whole into memory, so a huge file (a runaway export, a file of the
//! wrong kind dropped into a participant folder, or a hostile one) could exhaust memory. The
//! limits are far above any real participant's data: a CSV of 64 MiB holds well over a million
//! daily rows, and a profile or program file is a few kilobytes. They are documented in the
//! README ("Unattended runs, shards and scheduling").

use std::io::Read;
use std::path::Path;

/// Largest CSV input file read, in bytes (64 MiB).
pub const MAX_CSV_BYTES: u64 = 64 * 1024 * 1024;
/// Largest YAML input file read (`program.yaml`, `profile.yaml`), in bytes (1 MiB).
pub const MAX_YAML_BYTES: u64 = 1024 * 1024;

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

/// The message for a file over its limit.
pub fn too_large_message(size: u64, limit: u64) -> String {
    format!(
        "the file is {} ({} bytes), larger than the limit of {} for this kind of file; it was not read \
         (check it is the right file; split a very long history into the reporting years)",
        human(size),
        size,
        human(limit)
    )
}

/// Reads a whole input file, refusing it before reading when it is over its limit
/// ([`limit_for`]). The file is opened read-only. The size is checked on the open file and the
/// read is capped, so a file that grows while it is read is still refused.
pub fn read_input(path: &Path) -> std::io::Result<Vec<u8>> {
    let limit = limit_for(path);
    let f = std::fs::OpenOptions::new().read(true).open(path)?;
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
/// reports why it cannot be read).
pub fn check_size(path: &Path) -> Result<(), String> {
    match std::fs::metadata(path) {
        Ok(m) if m.is_file() && m.len() > limit_for(path) => {
            Err(too_large_message(m.len(), limit_for(path)))
        }
        _ => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

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

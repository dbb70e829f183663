//! Participant folders: discovery, `profile.yaml`, the CSV files and their checks.
//!
//! [`discover`] lists the folders under `participants/`; [`load_participant`] reads one folder
//! (read-only), checks everything and returns the data with every diagnostic. A problem in one
//! participant never stops the others. The parsers ([`profile`], [`records`]) work on text.

pub mod loinc;
pub mod profile;
pub mod quantity;
pub mod records;
pub mod table;

use crate::diag::{Diagnostic, Severity};
use crate::program::Program;
use crate::program::load::{decode_utf8, is_plain_id};
use chrono::NaiveDate;
use cohortpress_metric_api::ParticipantData;
use records::Window;
use std::collections::BTreeMap;
use std::path::PathBuf;
use table::{CsvOptions, FileCtx};

/// The folder under the program folder that holds participant folders.
pub const PARTICIPANTS_DIR: &str = "participants";
/// The required profile file of a participant folder.
pub const PROFILE_FILE: &str = "profile.yaml";

/// A participant folder found under `participants/`.
#[derive(Debug, Clone, PartialEq, Eq, PartialOrd, Ord)]
pub struct ParticipantDir {
    /// The folder name, which must equal the profile's id.
    pub id: String,
    /// Absolute path of the folder.
    pub path: PathBuf,
}

/// One input file that was read, for the run manifest.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct InputFile {
    /// Path relative to the program folder.
    pub path: String,
    /// blake3 hash of the bytes, hex.
    pub blake3: String,
    /// Size in bytes.
    pub bytes: u64,
}

/// The result of loading one participant folder.
#[derive(Debug, Clone)]
pub struct LoadedParticipant {
    /// Folder name.
    pub id: String,
    /// The checked data; `None` when an error makes the participant unusable.
    pub data: Option<ParticipantData>,
    /// Every problem found, errors and warnings.
    pub diagnostics: Vec<Diagnostic>,
    /// How files were read where it was recognised rather than written our way (shown by
    /// `check`; not problems).
    pub notes: Vec<table::Note>,
    /// Files read.
    pub files: Vec<InputFile>,
    /// Line of `enrolled` in profile.yaml, for messages about the enrolment date.
    pub enrolled_line: Option<u64>,
    /// Rows in the file and rows used, of weights.csv, intake.csv and activity.csv.
    pub rows: FileRows,
}

/// Of one input file: its data rows as the table reader sees them, rows dropped for their
/// shape included (not blank lines, repeated headers, title lines, date rows or summary rows),
/// and the rows its parser kept at its end that are dated up to the end of the period a run
/// reports (rows after it are read, but no figure of the period uses them). Both `None` when
/// the file is absent; `in_file` `None` and `used` 0 when it could not be read as text at all.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct RowCount {
    /// Data rows in the file.
    pub in_file: Option<usize>,
    /// Rows used.
    pub used: Option<usize>,
}

/// [`RowCount`] of the files whose rows the tidy metrics count.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct FileRows {
    /// weights.csv.
    pub weights: RowCount,
    /// intake.csv.
    pub intake: RowCount,
    /// activity.csv.
    pub activity: RowCount,
}

impl LoadedParticipant {
    /// Whether any diagnostic is an error (a file that could not be used, or the whole
    /// participant when the profile or folder is unusable).
    pub fn has_errors(&self) -> bool {
        self.diagnostics
            .iter()
            .any(|d| d.severity == Severity::Error)
    }
}

/// Smallest `weights.csv` compared across participants by [`same_weigh_ins`]: about five
/// weigh-ins, so two people's identical files are not a coincidence of one or two rows.
pub const SAME_WEIGHTS_MIN_BYTES: u64 = 100;

/// `expected` of the error [`same_weigh_ins`] gives, by which a run recognises it.
const SAME_WEIGHTS_EXPECTED: &str = "each participant's own weigh-ins";

/// Whether `d` is the error of [`same_weigh_ins`]: this folder's weigh-ins are a copy of
/// another folder's.
pub fn is_copy_of_another(d: &Diagnostic) -> bool {
    d.severity == Severity::Error && d.expected.as_deref() == Some(SAME_WEIGHTS_EXPECTED)
}

/// [`same_weigh_ins`] over participant folders before they are loaded, so that each report
/// can say so (the reports are written as each participant is processed, before any total):
/// every folder's `weights.csv` (any case of the name, not through a link) of at least
/// [`SAME_WEIGHTS_MIN_BYTES`], compared by size first and hashed only when another has the
/// same size. A run takes this as its one list of copies (report, log, data-quality list and
/// group step), over every folder of the program, also under `--only` and `--shard`.
pub fn copied_weigh_ins(dirs: &[ParticipantDir]) -> Vec<Diagnostic> {
    let mut by_size: BTreeMap<u64, Vec<(&ParticipantDir, String)>> = BTreeMap::new();
    for d in dirs {
        let Ok(rd) = std::fs::read_dir(&d.path) else {
            continue;
        };
        let Some(name) = rd
            .filter_map(Result::ok)
            .filter_map(|e| e.file_name().into_string().ok())
            .find(|n| n.eq_ignore_ascii_case("weights.csv"))
        else {
            continue;
        };
        let Ok(meta) = std::fs::symlink_metadata(d.path.join(&name)) else {
            continue;
        };
        if meta.is_file() && meta.len() >= SAME_WEIGHTS_MIN_BYTES {
            by_size.entry(meta.len()).or_default().push((d, name));
        }
    }
    let mut files: Vec<(String, Vec<InputFile>)> = Vec::new();
    for same_size in by_size.values().filter(|v| v.len() > 1) {
        for (d, name) in same_size {
            let Ok(dir) = crate::limits::open_dir(&d.path) else {
                continue;
            };
            let Ok(bytes) = crate::limits::read_input_in(&dir, name) else {
                continue;
            };
            files.push((
                d.id.clone(),
                vec![InputFile {
                    path: format!("{PARTICIPANTS_DIR}/{}/{name}", d.id),
                    blake3: blake3::hash(&bytes).to_hex().to_string(),
                    bytes: bytes.len() as u64,
                }],
            ));
        }
    }
    files.sort_by(|a, b| a.0.cmp(&b.0));
    same_weigh_ins(files.iter().map(|(id, f)| (id.as_str(), f.as_slice())))
}

/// Participants whose `weights.csv` is byte for byte another participant's: one person's data
/// in two folders (enrolled twice under two ids, or a folder copied for a new participant and
/// not emptied). Both were reported and counted in the group figures as two people, so a group
/// of ten could pass as eleven. Returns an error for each of them (in the order given), naming
/// the other folders; `check` and `run` both use it, and a run leaves them out of the group
/// figures. `participants` is (id, files read) in id order.
pub fn same_weigh_ins<'a>(
    participants: impl IntoIterator<Item = (&'a str, &'a [InputFile])>,
) -> Vec<Diagnostic> {
    let mut by_hash: std::collections::BTreeMap<&str, Vec<(&str, &str)>> =
        std::collections::BTreeMap::new();
    for (id, files) in participants {
        let weights = files.iter().find(|f| {
            f.bytes >= SAME_WEIGHTS_MIN_BYTES
                && f.path
                    .rsplit('/')
                    .next()
                    .is_some_and(|n| n.eq_ignore_ascii_case("weights.csv"))
        });
        if let Some(f) = weights {
            by_hash
                .entry(f.blake3.as_str())
                .or_default()
                .push((id, f.path.as_str()));
        }
    }
    let mut out = Vec::new();
    for same in by_hash.values().filter(|v| v.len() > 1) {
        for &(id, path) in same {
            let others: Vec<&str> = same
                .iter()
                .filter(|(o, _)| *o != id)
                .map(|(_, p)| *p)
                .collect();
            out.push((
                id,
                Diagnostic::error(
                    path,
                    format!(
                        "the same weigh-ins as {} (the files are identical): one person's data in \
                         more than one participant folder; none of them is counted in the group \
                         report",
                        others.join(", ")
                    ),
                )
                .participant(id)
                .expected(SAME_WEIGHTS_EXPECTED)
                .found(format!("a copy of {}", others.join(", ")))
                .hint(
                    "a participant enrolled twice, or a folder copied for a new participant: keep \
                     the person's data in one folder and remove or correct the other (their own \
                     reports are still written)",
                ),
            ));
        }
    }
    out.sort_by(|a, b| a.0.cmp(b.0));
    out.into_iter().map(|(_, d)| d).collect()
}

/// Most days an enrolment may come before `program.start` (sign-ups before the first session);
/// an earlier date is a typing error in the year (common practice: a program's enrolment opens
/// weeks, not years, before it starts).
pub const MAX_ENROLLED_BEFORE_START_DAYS: i64 = 365;

/// An error on `enrolled` when it is more than [`MAX_ENROLLED_BEFORE_START_DAYS`] before the
/// program's start: `1926-04-01` for `2026-04-01` was read without a word, and every "since
/// enrolment" figure (weeks, adherence, attendance) ran over a century of empty weeks (an 8 MB
/// PDF of blank weekly rows; its weeks fell outside the group's week-by-week means).
fn enrolled_long_before_start(
    enrolled: NaiveDate,
    start: NaiveDate,
    ctx: &FileCtx,
    line: Option<u64>,
) -> Option<Diagnostic> {
    let days = (start - enrolled).num_days();
    if days <= MAX_ENROLLED_BEFORE_START_DAYS {
        return None;
    }
    let mut d = ctx
        .error(format!(
            "enrolment date {enrolled} is {} days before the program starts ({start}); the \
             participant cannot be used",
            crate::diag::thousands(days as usize)
        ))
        .field("enrolled")
        .expected(format!(
            "an enrolment date at most {MAX_ENROLLED_BEFORE_START_DAYS} days before {start}"
        ))
        .found(enrolled.to_string())
        .hint("check the year");
    if let Some(l) = line {
        d = d.at(l, None);
    }
    Some(d)
}

/// Plausible BMI, kg/m², of the median weigh-in at the profile's height (common practice: below
/// 12 an adult does not live for long, above 150 nobody has been recorded; outside it, the
/// height or the weights are wrong).
pub const BMI_PLAUSIBLE: (f64, f64) = (12.0, 150.0);

/// An error on the profile's height when the median weigh-in gives a BMI outside
/// [`BMI_PLAUSIBLE`].
fn implausible_bmi(
    p: &cohortpress_metric_api::Profile,
    weights: &[cohortpress_metric_api::WeighIn],
    ctx: &FileCtx,
    height_line: Option<u64>,
) -> Option<Diagnostic> {
    if weights.is_empty() {
        return None;
    }
    let mut kg: Vec<f64> = weights.iter().map(|w| w.weight.kg()).collect();
    kg.sort_by(f64::total_cmp);
    let median = kg[kg.len() / 2];
    let m = p.height.cm() / 100.0;
    let bmi = median / (m * m);
    if (BMI_PLAUSIBLE.0..=BMI_PLAUSIBLE.1).contains(&bmi) {
        return None;
    }
    let mut d = ctx
        .error(format!(
            "a height of {:.0} cm with weigh-ins around {median:.1} kg gives a BMI of {bmi:.1}, \
             which no adult has; the participant cannot be used",
            p.height.cm()
        ))
        .field("height")
        .expected(format!(
            "a height that gives the weigh-ins a BMI between {} and {}",
            BMI_PLAUSIBLE.0, BMI_PLAUSIBLE.1
        ))
        .found(format!("{:.0} cm", p.height.cm()))
        .hint("check the height (a typing error, or inches written as cm) and the weights' unit");
    if let Some(l) = height_line {
        d = d.at(l, None);
    }
    Some(d)
}

/// Lists the participant folders under `ROOT/participants/`, sorted by name. Entries that are not
/// usable folders (bad names, files, links) are reported as diagnostics.
pub fn discover(program: &Program) -> (Vec<ParticipantDir>, Vec<Diagnostic>) {
    let base = program.root.join(PARTICIPANTS_DIR);
    let mut dirs = Vec::new();
    let mut diags = Vec::new();
    if !base.is_dir() {
        // Something else under the name (a file, a FIFO, a link to nothing: an unmounted
        // share's mount point link) was reported as "does not exist", which sent people
        // looking for a folder that is there.
        let found = match std::fs::symlink_metadata(&base) {
            Err(_) => None,
            Ok(m) if m.file_type().is_symlink() => {
                Some("a symbolic link to a folder that does not exist (a share not mounted?)")
            }
            Ok(m) => Some(crate::limits::kind_of(&m.file_type())),
        };
        let mut d = match found {
            None => Diagnostic::error(PARTICIPANTS_DIR, "the participants folder does not exist"),
            Some(kind) => Diagnostic::error(
                PARTICIPANTS_DIR,
                format!("`participants` is {kind}, not a folder"),
            )
            .found(kind),
        };
        d = d
            .expected("a folder `participants/` beside program.yaml, with one folder per participant")
            .hint(if found.is_some() {
                "move it away and put each participant's profile.yaml in its own folder under a folder `participants/`"
            } else {
                "create it and put each participant's profile.yaml in its own folder"
            });
        diags.push(d);
        return (dirs, diags);
    }
    let walker = walkdir::WalkDir::new(&base)
        .min_depth(1)
        .max_depth(1)
        .follow_links(false)
        .sort_by_file_name();
    for entry in walker {
        let entry = match entry {
            Ok(e) => e,
            Err(e) => {
                diags.push(Diagnostic::error(
                    PARTICIPANTS_DIR,
                    format!("cannot list the participants folder ({e})"),
                ));
                continue;
            }
        };
        let raw_name = entry.file_name();
        let name = raw_name.to_string_lossy().into_owned();
        if name.starts_with('.') {
            // Hidden entries (.DS_Store, .git) are not participants. A hidden folder holding a
            // profile.yaml looks like one hidden by a typo or a sync tool (`.SG-050`): it was
            // left out without a word, not even under `check --verbose`.
            if entry.file_type().is_dir()
                && std::fs::symlink_metadata(entry.path().join("profile.yaml")).is_ok()
            {
                diags.push(
                    Diagnostic::warning(
                        format!("{PARTICIPANTS_DIR}/{}", printable(&name)),
                        "a hidden folder (its name starts with `.`) holds a profile.yaml; it is \
                         skipped, so whoever it holds is not reported",
                    )
                    .expected("participant folders named by their id, e.g. `LW-0147`")
                    .found(format!("`{}`", printable(&name)))
                    .hint(
                        "if it is a participant's folder, rename it to the participant's id; \
                         otherwise move it out of participants/",
                    ),
                );
            }
            continue;
        }
        if is_system_entry(&name) {
            continue;
        }
        let rel = format!("{PARTICIPANTS_DIR}/{}", printable(&name));
        let ft = entry.file_type();
        if ft.is_symlink() {
            // Never followed: a link could lead into another participant's folder (whose data
            // would then appear in this person's report) or anywhere else on the system.
            let mut d = Diagnostic::error(
                rel,
                "the participant folder is a symbolic link; links are not followed, so this participant is not reported",
            )
            .expected("a real folder holding the participant's files")
            .found("a symbolic link")
            .hint("move or copy the participant's folder itself into participants/");
            if let Some(id) = raw_name.to_str().filter(|n| is_plain_id(n)) {
                d = d.participant(id);
            }
            diags.push(d);
            continue;
        }
        if !ft.is_dir() {
            diags.push(
                Diagnostic::warning(rel, "a file in the participants folder is skipped")
                    .expected("only folders, one per participant")
                    .hint("move the file into a participant's folder or out of participants/"),
            );
            continue;
        }
        match raw_name.to_str() {
            Some(id) if is_plain_id(id) && is_device_name(id) => diags.push(
                Diagnostic::error(rel, "the folder name is a device name on Windows; the folder is skipped")
                    .participant(id)
                    .expected("a participant id that is not CON, PRN, AUX, NUL, COM1–COM9 or LPT1–LPT9 (in any case)")
                    .found(format!("`{id}`"))
                    .hint("the id names the participant's report files, and on a Windows share `CON.html` cannot be written (the run would fail for everyone): rename the folder and the `id` in its profile.yaml"),
            ),
            Some(id) if is_plain_id(id) => {
                dirs.push(ParticipantDir { id: id.to_string(), path: entry.into_path() })
            }
            _ => diags.push(
                Diagnostic::error(rel, "the folder name is not a usable participant id; the folder is skipped")
                    .expected("letters, digits, `-` and `_` only (at most 64), e.g. `LW-0147`")
                    .found(format!("`{}`", printable(&name)))
                    .hint("rename the folder (the id names output files) and set the same `id` in its profile.yaml"),
            ),
        }
    }
    dirs.sort();
    // Ids that differ only in case (`LW-01`, `lw-01`) name the same output files on a
    // case-insensitive file system (Windows and macOS shares, USB sticks): one report would be
    // written over, or under the other's name. Most likely it is one person exported twice, so
    // neither is reported (counted twice, the group report would count them twice).
    let mut by_folded: BTreeMap<String, Vec<String>> = BTreeMap::new();
    for d in &dirs {
        by_folded
            .entry(d.id.to_ascii_lowercase())
            .or_default()
            .push(d.id.clone());
    }
    let clashing: Vec<Vec<String>> = by_folded.into_values().filter(|v| v.len() > 1).collect();
    for ids in &clashing {
        let listed = ids
            .iter()
            .map(|i| format!("`{i}`"))
            .collect::<Vec<_>>()
            .join(", ");
        for id in ids {
            diags.push(
                Diagnostic::error(
                    format!("{PARTICIPANTS_DIR}/{id}"),
                    format!("participant folders {listed} differ only in upper and lower case; none of them is reported"),
                )
                .participant(id)
                .expected("participant ids that differ in more than case (output files are named by the id, and many file systems do not tell case apart)")
                .found(listed.clone())
                .hint("keep one folder per person: merge the folders, or rename one of them and the `id` in its profile.yaml"),
            );
        }
    }
    dirs.retain(|d| !clashing.iter().any(|ids| ids.contains(&d.id)));
    if dirs.is_empty() && diags.is_empty() {
        // An empty folder is what an unmounted network share looks like: reporting on nobody
        // would replace last month's reports with empty ones.
        diags.push(
            Diagnostic::error(
                PARTICIPANTS_DIR,
                "the participants folder holds no participant folders",
            )
            .expected("one folder per participant, each with its profile.yaml")
            .hint("if the folder lives on a network share, check that the share is mounted"),
        );
    }
    (dirs, diags)
}

/// Whether `name` is an entry file systems and operating systems put in any folder, which is
/// no participant's, as a hidden entry is not: the `__MACOSX/` a Mac's zip archive unpacks
/// beside its files, the `lost+found/` at the root of an ext file system (a participants folder
/// that is a mount point), Windows Explorer's `Thumbs.db` and `desktop.ini`, and a Windows
/// drive's `$RECYCLE.BIN` and `System Volume Information` (case aside). `__MACOSX` was "a
/// participant with no profile.yaml" and `lost+found` one to rename (exit code 4 on every run);
/// `Thumbs.db` a file to move (exit code 1).
fn is_system_entry(name: &str) -> bool {
    [
        "__MACOSX",
        "lost+found",
        "Thumbs.db",
        "desktop.ini",
        "$RECYCLE.BIN",
        "System Volume Information",
    ]
    .iter()
    .any(|n| n.eq_ignore_ascii_case(name))
}

/// Whether `id` is a name Windows reserves for a device, with or without an extension
/// (Microsoft, "Naming Files, Paths, and Namespaces"): `CON.html` cannot be created there.
/// Whether `id` is a device name on Windows (`CON`, `NUL`, `COM1` …, in any case): a folder
/// so named is skipped by discovery, and `import fhir` writes none.
pub(crate) fn is_device_name(id: &str) -> bool {
    let upper = id.to_ascii_uppercase();
    matches!(upper.as_str(), "CON" | "PRN" | "AUX" | "NUL")
        || ((upper.starts_with("COM") || upper.starts_with("LPT"))
            && upper.len() == 4
            && matches!(upper.as_bytes()[3], b'1'..=b'9'))
}

/// Whether a discovery diagnostic concerns the participants folder as a whole (missing,
/// unreadable or empty): then nothing can be reported, and `check` and `run` both exit 3.
pub fn is_folder_error(d: &Diagnostic) -> bool {
    d.severity == crate::diag::Severity::Error
        && d.participant.is_none()
        && d.file == PARTICIPANTS_DIR
}

/// Whether a discovery diagnostic refuses one entry of the participants folder as a
/// participant's folder (a link, a name that is no usable id or a device name, ids that differ
/// only in case): every discovery error but those about the folder as a whole
/// ([`is_folder_error`]). The one test by which `check` counts such a folder among the
/// participants not usable, and a run among those left out (its last line's "with errors", the
/// group report's note): `check` counted a linked `participants/SG-099` nowhere ("50 usable, 1
/// not usable" beside its error) while the run counted it left out.
pub fn is_refused_folder(d: &Diagnostic) -> bool {
    d.severity == crate::diag::Severity::Error && !is_folder_error(d)
}

/// Shows control characters in a name as escapes so a message cannot be garbled by them, and
/// characters a name shows as nothing (a zero-width space, a direction mark: `weights\u{200b}.csv`
/// printed as `weights.csv`) so that it does not look like another.
fn printable(name: &str) -> String {
    name.chars()
        .flat_map(|c| {
            if c.is_control() || crate::text::is_default_ignorable(c) {
                c.escape_default().collect::<Vec<_>>()
            } else {
                vec![c]
            }
        })
        .collect()
}

/// The CSV options of a program.
pub fn csv_options(program: &Program) -> CsvOptions {
    let input = &program.def.input;
    let columns = input
        .columns
        .iter()
        .map(|(kind, map)| {
            let map = map
                .iter()
                .map(|(written, ours)| (table::header_key(written).0, ours.clone()))
                .collect();
            (kind.clone(), map)
        })
        .collect();
    let mut activities = crate::activities::LocalTable::default();
    for (label, a) in &program.def.activities {
        // load_program has checked that each entry has one usable value.
        let entry = match (&a.compendium, a.met) {
            (Some(code), _) => crate::activities::by_compendium_or_code(code)
                .map(crate::activities::LocalEntry::Compendium),
            (None, Some(m)) => Some(crate::activities::LocalEntry::Met(m)),
            (None, None) => None,
        };
        if let Some(e) = entry {
            activities.insert(label, e);
        }
    }
    CsvOptions {
        // load_program has checked the delimiter is one ASCII character.
        delimiter: input.delimiter.and_then(|d| u8::try_from(d).ok()),
        date_format: input.date_format.clone(),
        time_zone: input.time_zone.as_deref().and_then(table::LocalZone::parse),
        columns: std::sync::Arc::new(columns),
        activities: std::sync::Arc::new(activities),
        program_span: Some((program.def.program.start, program.def.program.end)),
    }
}

/// Reads one file of the folder; `None` when it does not exist. Unreadable or non-UTF-8 files
/// give an error diagnostic.
///
/// `listing` is the names in the folder (read through its handle), when it could be listed: it
/// answers "is there such a file" without an `open` call per missing file. Whatever is there is
/// opened without following links and refused unless it is a regular file.
fn read_input(
    dir: &crate::limits::InputDir,
    name: &str,
    listing: Option<&[String]>,
    encoding: crate::program::InputEncoding,
    ctx: &FileCtx,
    files: &mut Vec<InputFile>,
    diags: &mut Vec<Diagnostic>,
) -> Option<Result<String, ()>> {
    if let Some(l) = listing
        && !l.iter().any(|n| n == name)
    {
        return None;
    }
    // Opened without following links, regular files only (crate::limits::open_input), and
    // refused before reading when over the size limit.
    let bytes = match crate::limits::read_input_in(dir, name) {
        Ok(b) => b,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return None,
        Err(e) => {
            // Without its profile the participant is not reported at all (the hint said "the
            // participant is reported without it" beside "participant left out").
            let hint = if name.eq_ignore_ascii_case(PROFILE_FILE) {
                "the participant is not reported until this file can be read; other participants are not affected"
            } else {
                "this file is left out until it can be read; the participant is reported without it, and other participants are not affected"
            };
            // A link or a folder where the file should be: what was expected and found, as
            // other messages give them ("cannot read the file (it is a folder, not a regular
            // file; nothing was read from it (put the file itself here))" gave neither).
            let d = match crate::limits::NotAFile::of(&e) {
                Some(n) => ctx
                    .error(format!("cannot read the file: {}", n.sentence()))
                    .expected("a regular file")
                    .found(n.found)
                    .hint(format!("{}; {hint}", crate::limits::NotAFile::HINT)),
                None => ctx.error(format!("cannot read the file ({e})")).hint(hint),
            };
            diags.push(d);
            return Some(Err(()));
        }
    };
    files.push(InputFile {
        path: ctx.file.clone(),
        blake3: blake3::hash(&bytes).to_hex().to_string(),
        bytes: bytes.len() as u64,
    });
    match crate::encoding::decode_utf16(&bytes) {
        Some(Ok((text, order))) => {
            ctx.note(format!("read as {order} text"));
            return Some(Ok(text));
        }
        Some(Err(why)) => {
            diags.push(
                ctx.error(format!("{why}; the file is not used"))
                    .expected("UTF-8 or UTF-16 text")
                    .hint("save the file as UTF-8 (in most editors: Save As → Encoding: UTF-8)"),
            );
            return Some(Err(()));
        }
        None => {}
    }
    // UTF-8 text is the file's own bytes, not a copy of them (a file may be 64 MiB).
    let bytes = match String::from_utf8(bytes) {
        Ok(mut text) => {
            if text.starts_with('\u{feff}') {
                text.drain(..'\u{feff}'.len_utf8());
            }
            return Some(Ok(text));
        }
        Err(e) => e.into_bytes(),
    };
    match decode_utf8(&bytes, &ctx.file) {
        Ok(t) => Some(Ok(t.to_string())),
        Err(d) => match crate::encoding::decode_legacy(&bytes) {
            // A legacy 8-bit file (Windows-1252 / Latin-1) is read when it decodes
            // unambiguously; otherwise the UTF-8 error stands, with how to fix it.
            Ok((text, chars)) => {
                // Expected when program.yaml says its exports are Windows-1252: a warning in
                // every monthly run (exit code 1) for files the program always gets so told a
                // scheduler's script nothing but that a run was not clean.
                if encoding == crate::program::InputEncoding::Windows1252 {
                    ctx.note(format!(
                        "read as Windows-1252 (input.encoding), which gives {chars}"
                    ));
                } else {
                    // Located at the first byte that is not UTF-8, as the UTF-8 error locates it,
                    // with the character it was read as: the warning named the characters but
                    // not where in the file one was.
                    let first = std::str::from_utf8(&bytes)
                        .err()
                        .and_then(|e| bytes.get(e.valid_up_to()))
                        .and_then(|b| crate::encoding::cp1252_char(*b));
                    let mut w = ctx
                        .warning(format!(
                            "the file is not UTF-8; it was read as Windows-1252 (Western European), which gives {chars}"
                        ))
                        .expected("UTF-8 text");
                    if let Some(line) = d.line {
                        w = w.at(line, d.column);
                    }
                    if let (Some(found), Some(c)) = (&d.found, first) {
                        w = w.found(format!("{found}, read as `{c}`"));
                    }
                    diags.push(w.hint("check those characters, then save the file as UTF-8 (in most editors: Save As → Encoding: UTF-8); if the program's exports are always so, set `input.encoding: windows-1252` in program.yaml"));
                }
                Some(Ok(text))
            }
            Err(why) => {
                let hint = format!(
                    "{why}; save the file as UTF-8 (in most editors: Save As → Encoding: UTF-8)"
                );
                diags.push(d.participant(&ctx.participant).hint(hint));
                Some(Err(()))
            }
        },
    }
}

/// The name in the folder under which input `name` is read: `name` itself when it is there
/// (or the folder could not be listed), else the one name that differs from it only in case
/// (`Weights.csv`, `WEIGHTS.CSV`: some systems export so, and a case-insensitive file system
/// would have opened it anyway). Two such names are ambiguous: neither is read.
fn input_name(listing: Option<&[String]>, name: &str) -> String {
    let Some(names) = listing else {
        return name.to_string();
    };
    if names.iter().any(|n| n == name) {
        return name.to_string();
    }
    let mut variants = names.iter().filter(|n| n.eq_ignore_ascii_case(name));
    match (variants.next(), variants.next()) {
        (Some(only), None) => only.clone(),
        _ => name.to_string(),
    }
}

/// Notes that an input was read under a name written in other case.
fn note_case(ctx: &FileCtx, name: &str, ours: &str) {
    if name != ours {
        ctx.note(format!(
            "`{name}` read as `{ours}` (the name differs only in case)"
        ));
    }
}

/// The letters a file name starts with, compared as a reader sees them (case, width and
/// invisible characters aside): `weights` of `weights.csv`, `Weights (1).xlsx` and `weights`.
fn name_stem(name: &str) -> String {
    crate::text::fold_for_comparison(name)
        .chars()
        .take_while(|c| c.is_alphabetic())
        .collect()
}

/// Files a participant folder may hold.
const KNOWN_FILES: [&str; 6] = [
    PROFILE_FILE,
    "weights.csv",
    "intake.csv",
    "activity.csv",
    "sessions.csv",
    "labs.csv",
];

/// A participant folder opened once, without following a link, and listed once through that
/// handle; its files are then read relative to the handle, so a folder replaced by a link since
/// it was listed is not followed either.
#[derive(Debug)]
pub struct OpenedDir {
    handle: std::io::Result<crate::limits::InputDir>,
    /// The names in the folder and whether every entry could be read (`None`: unreadable).
    entries: Option<(Vec<String>, bool)>,
}

impl OpenedDir {
    /// Every name in the folder, sorted (empty when it cannot be opened or read).
    pub fn names(&self) -> Vec<String> {
        let mut names = self
            .entries
            .as_ref()
            .map(|(n, _)| n.clone())
            .unwrap_or_default();
        names.sort();
        names
    }
}

/// Opens and lists a participant folder (see [`OpenedDir`]).
pub fn open(dir: &ParticipantDir) -> OpenedDir {
    let handle = crate::limits::open_dir(&dir.path);
    let entries = handle
        .as_ref()
        .ok()
        .and_then(|h| crate::limits::list_dir(h).ok());
    OpenedDir { handle, entries }
}

/// Loads and checks one participant folder. Data dated after `as_of` are future data.
pub fn load_participant(
    program: &Program,
    dir: &ParticipantDir,
    as_of: NaiveDate,
) -> LoadedParticipant {
    load_opened(program, dir, open(dir), as_of, None)
}

/// [`load_participant`] of a folder already opened and listed, for a run reporting `period`
/// (`None`: for `check`; see [`records::Window::reported_from`]). The rows used that
/// [`RowCount`] gives are those dated up to the period's end: rows after it, up to `as_of`,
/// are read and checked, but no figure of the period uses them.
pub fn load_opened(
    program: &Program,
    dir: &ParticipantDir,
    opened: OpenedDir,
    as_of: NaiveDate,
    period: Option<cohortpress_metric_api::Period>,
) -> LoadedParticipant {
    let reported_from = period.map(|p| p.from);
    let counted_to = period.map(|p| p.to);
    let id = dir.id.as_str();
    let rel = |name: &str| format!("{PARTICIPANTS_DIR}/{id}/{name}");
    let mut diags = Vec::new();
    let mut files = Vec::new();
    let opts = csv_options(program);

    let handle = match opened.handle {
        Ok(h) => h,
        Err(e) => {
            diags.push(
                Diagnostic::error(
                    format!("{PARTICIPANTS_DIR}/{id}"),
                    format!("the participant folder cannot be opened ({e}); this participant is not reported"),
                )
                .participant(id)
                .expected("a real folder holding the participant's files"),
            );
            return LoadedParticipant {
                id: dir.id.clone(),
                data: None,
                diagnostics: diags,
                notes: Vec::new(),
                files,
                enrolled_line: None,
                rows: FileRows::default(),
            };
        }
    };

    // The folder's entries: files the tool does not read but that look like inputs are most
    // likely a misspelt name; the listing also tells `read_input` which input files exist. It
    // is read through the folder's handle and only trusted when every entry could be read.
    let mut listing: Option<Vec<String>> = None;
    if let Some((mut names, complete)) = opened.entries {
        if complete {
            listing = Some(names.clone());
        }
        names.sort();
        // Input files written in other case (`Weights.csv`) are read as the inputs they name.
        let read_as: Vec<String> = KNOWN_FILES
            .iter()
            .map(|k| input_name(Some(&names), k))
            .collect();
        // The inputs the folder does not hold, under their names or in other case.
        let absent: Vec<&str> = KNOWN_FILES
            .iter()
            .zip(&read_as)
            .filter(|(_, r)| !names.contains(r))
            .map(|(k, _)| *k)
            .collect();
        let mut stray = 0usize;
        for n in names {
            if n.starts_with('.') || KNOWN_FILES.contains(&n.as_str()) || read_as.contains(&n) {
                continue;
            }
            let lower = n.to_lowercase();
            let input_like = [".csv", ".yaml", ".yml"].iter().any(|x| lower.ends_with(x));
            // A name that starts as the name of an input the folder lacks is most likely that
            // input saved under a name the tool does not read: `weights.csv.txt` (a system that
            // hides extensions), `Weights.xlsx`, `weights.tsv`, `weights`, `weights.csv ` (a
            // space at the end), `.сsv` with a Cyrillic `с`. Those were passed over without a
            // word, and the participant was reported without weigh-ins, "nothing to report".
            let meant = absent
                .iter()
                .copied()
                .find(|k| name_stem(&n) == name_stem(k));
            if !input_like && meant.is_none() {
                continue;
            }
            stray += 1;
            if stray > crate::limits::MAX_DIAGNOSTICS_PER_KIND {
                continue;
            }
            let hint = if lower == "profile.yml" || lower == "profile.yaml" {
                "rename it to `profile.yaml` (lowercase, .yaml)".to_string()
            } else if let Some(k) = meant {
                format!(
                    "this folder has no `{k}`: if this file holds it, save it as `{k}` \
                     ({}), named exactly so",
                    if k == PROFILE_FILE {
                        "YAML text"
                    } else {
                        "CSV text: comma-, semicolon- or tab-separated"
                    }
                )
            } else {
                format!(
                    "the files read are {}; check the spelling",
                    KNOWN_FILES.join(", ")
                )
            };
            diags.push(
                FileCtx::new(id, rel(&printable(&n)))
                    .warning(format!(
                        "`{}` is not an input file the tool reads; it is ignored",
                        printable(&n)
                    ))
                    .hint(hint),
            );
        }
        if stray > crate::limits::MAX_DIAGNOSTICS_PER_KIND {
            diags.push(
                FileCtx::new(id, format!("{PARTICIPANTS_DIR}/{id}"))
                    .warning(format!(
                        "… and {} more files that are not input files the tool reads; they are ignored",
                        crate::diag::thousands(stray - crate::limits::MAX_DIAGNOSTICS_PER_KIND)
                    ))
                    .hint(format!("the files read are {}", KNOWN_FILES.join(", "))),
            );
        }
    }

    let profile_name = input_name(listing.as_deref(), PROFILE_FILE);
    let pctx = FileCtx::new(id, rel(&profile_name));
    note_case(&pctx, &profile_name, PROFILE_FILE);
    let mut enrolled_line = None;
    let mut height_line = None;
    let profile = match read_input(
        &handle,
        &profile_name,
        listing.as_deref(),
        program.def.input.encoding,
        &pctx,
        &mut files,
        &mut diags,
    ) {
        None => {
            // The participant's files one folder down (`SG-002/SG-002/profile.yaml`: an archive
            // unpacked into a folder of its own): "add profile.yaml" sent people to write one.
            let nested = listing.as_deref().unwrap_or_default().iter().find(|n| {
                std::fs::symlink_metadata(dir.path.join(n).join(PROFILE_FILE))
                    .is_ok_and(|m| m.is_file())
            });
            let hint = match nested {
                Some(n) => format!(
                    "the folder `{}` inside it holds a profile.yaml: move that folder's files up \
                     into participants/{id}/ (an archive unpacked into a folder of its own)",
                    printable(n)
                ),
                None => "add profile.yaml to the folder (see “profile.yaml” in docs/GUIDE.md)"
                    .to_string(),
            };
            diags.push(
                pctx.error(format!(
                    "participant folder `{id}` has no profile.yaml; the participant cannot be used"
                ))
                .expected("a profile.yaml with id, sex, birth_date or age, height, enrolled")
                .hint(hint),
            );
            None
        }
        Some(Err(())) => None,
        Some(Ok(text)) => {
            enrolled_line = crate::program::load::key_line(&text, "enrolled");
            height_line = crate::program::load::key_line(&text, "height");
            profile::parse_profile(
                &text,
                id,
                &program.info.targets,
                program.info.end,
                &pctx,
                &mut diags,
            )
            .map(|mut p| {
                group_keys_as_the_program_names_them(
                    &mut p,
                    &program.def.report.group_by,
                    &pctx,
                    crate::program::load::key_line(&text, "groups"),
                    &mut diags,
                );
                p
            })
        }
    };
    // CSV files are checked even when the profile is unusable, so every problem of the folder
    // is reported in one pass; without a profile only future dates can be checked.
    let window = Window {
        enrolled: profile.as_ref().map(|p| p.enrolled),
        withdrew: profile.as_ref().and_then(|p| p.withdrew),
        follow_up_weigh_ins: profile.as_ref().is_some_and(|p| p.follow_up_weigh_ins()),
        as_of,
        reported_from,
        height_cm: profile.as_ref().map(|p| p.height.cm()),
        high_bmi_checked: profile
            .as_ref()
            .is_some_and(|p| p.flags.iter().any(|f| f == profile::HIGH_BMI_CHECKED_FLAG)),
        low_bmi_checked: profile
            .as_ref()
            .is_some_and(|p| p.flags.iter().any(|f| f == profile::LOW_BMI_CHECKED_FLAG)),
    };
    // Only the profile (and the folder) can make a participant unusable: a CSV file that
    // cannot be used is an error for that file, and the participant is reported without it.
    let profile_usable = !diags.iter().any(|d| d.severity == Severity::Error);
    let mut notes = pctx.take_notes();
    macro_rules! csv_file {
        ($spec:expr, $parse:path) => {{
            let name = input_name(listing.as_deref(), $spec.name);
            let ctx = FileCtx::new(id, rel(&name))
                .with_consent_withdrawn(window.withdrew.filter(|_| !window.follow_up_weigh_ins));
            note_case(&ctx, &name, $spec.name);
            let first_diag = diags.len();
            let (rows, count) = match read_input(
                &handle,
                &name,
                listing.as_deref(),
                program.def.input.encoding,
                &ctx,
                &mut files,
                &mut diags,
            ) {
                None => (Vec::new(), RowCount::default()),
                Some(Err(())) => (
                    Vec::new(),
                    RowCount {
                        in_file: None,
                        used: Some(0),
                    },
                ),
                Some(Ok(text)) => {
                    let parsed = $parse(&text, &opts, &ctx, &window, &mut diags);
                    // Rows after the period's end are read (checked, and kept for the
                    // run's notes) but used by no figure of the period: not counted.
                    let used = parsed.as_ref().map_or(0, |v| {
                        ctx.rows_used_to(counted_to).unwrap_or_else(|| {
                            v.iter()
                                .filter(|r| counted_to.is_none_or(|to| r.date <= to))
                                .count()
                        })
                    });
                    // A file refused at its header was never read row by row: its rows are
                    // the records below that line (it gave 0 rows in the file, and a refused
                    // export looked empty in the tidy metrics).
                    let in_file = match (&parsed, ctx.rows_in_file()) {
                        (None, 0) => table::records_below_first_line(&text),
                        (_, n) => n,
                    };
                    (
                        parsed.unwrap_or_default(),
                        RowCount {
                            in_file: Some(in_file),
                            used: Some(used),
                        },
                    )
                }
            };
            notes.extend(ctx.take_notes());
            crate::diag::cap_per_kind(&mut diags, first_diag);
            (rows, count)
        }};
    }
    let (weights, weights_rows) = csv_file!(records::WEIGHTS, records::parse_weights);
    let (intake, intake_rows) = csv_file!(records::INTAKE, records::parse_intake);
    let (activity, activity_rows) = csv_file!(records::ACTIVITY, records::parse_activity);
    let (sessions, _) = csv_file!(records::SESSIONS, records::parse_sessions);
    let (labs, _) = csv_file!(records::LABS, records::parse_labs);
    let rows = FileRows {
        weights: weights_rows,
        intake: intake_rows,
        activity: activity_rows,
    };

    // Height and weight each in range can still give a BMI no adult has (250 cm typed for
    // 150 cm): every BMI, its WHO class and the clinical flags built on it would be wrong.
    let mut profile_usable = profile_usable;
    if let Some(p) = profile.as_ref().filter(|_| profile_usable)
        && let Some(d) =
            enrolled_long_before_start(p.enrolled, program.info.start, &pctx, enrolled_line)
    {
        diags.push(d);
        profile_usable = false;
    }
    if let Some(p) = profile.as_ref().filter(|_| profile_usable)
        && let Some(d) = implausible_bmi(p, &weights, &pctx, height_line)
    {
        diags.push(d);
        profile_usable = false;
    }
    let data = match profile {
        Some(profile) if profile_usable => Some(ParticipantData {
            profile,
            weights,
            intake,
            activity,
            sessions,
            labs,
        }),
        _ => None,
    };
    // Stable: diagnostics of one line keep the order they were found in.
    diags.sort_by(|a, b| (a.file.as_str(), a.line).cmp(&(b.file.as_str(), b.line)));
    LoadedParticipant {
        id: dir.id.clone(),
        data,
        diagnostics: diags,
        notes,
        files,
        enrolled_line,
        rows,
    }
}

/// `report.group_by` keys that no usable participant's profile gives (a typing error such as
/// `sites` for `site`): a warning each, at `report.group_by` in program.yaml. Without it the
/// group report split everyone into one section, "(not recorded)", and said the groups were too
/// small. `groups` holds each usable participant's groups (after
/// [`group_keys_as_the_program_names_them`]); with no usable participant nothing is said.
pub fn group_keys_nobody_has<'a>(
    program: &Program,
    groups: impl IntoIterator<Item = &'a BTreeMap<String, String>>,
) -> Vec<Diagnostic> {
    let mut given: std::collections::BTreeSet<&str> = std::collections::BTreeSet::new();
    let mut any = false;
    for g in groups {
        any = true;
        given.extend(g.keys().map(String::as_str));
    }
    if !any {
        return Vec::new();
    }
    let at = crate::program::load::key_position_in_file(&program.root, "report.group_by");
    program
        .def
        .report
        .group_by
        .iter()
        .filter(|k| !given.contains(k.as_str()))
        .map(|k| {
            let shown_keys: Vec<String> = given
                .iter()
                .take(10)
                .map(|g| format!("`{}`", crate::diag::printable(g)))
                .collect();
            let mut d = Diagnostic::warning(
                crate::program::load::PROGRAM_FILE,
                format!(
                    "no participant's profile.yaml gives group `{}`, so the group report's \
                     split by it would hold everyone under \"(not recorded)\"",
                    crate::diag::printable(k)
                ),
            )
            .field("report.group_by")
            .expected(if shown_keys.is_empty() {
                "a key the profiles give under `groups:` (they give none)".to_string()
            } else {
                format!(
                    "a key the profiles give under `groups:`: {}",
                    shown_keys.join(", ")
                )
            })
            .found(k.clone())
            .hint("spell it as the profiles do, or add it under `groups:` in the profiles");
            if let Some((line, col)) = at {
                d = d.at(line, col);
            }
            d
        })
        .collect()
}

/// A profile's group keys written in other case or spacing than `report.group_by` names them
/// (`Site:` for `group_by: [site]`, as YAML keys are typed by hand): read as the program's key,
/// with a note. Compared as written, the participant had no site: counted as "(not recorded)",
/// one short at their own site, with no word. A key written two ways in one profile is left
/// as it is (which one counts cannot be known), with a warning: the participant is counted
/// under "(not recorded)" for that key.
fn group_keys_as_the_program_names_them(
    profile: &mut cohortpress_metric_api::Profile,
    group_by: &[String],
    ctx: &FileCtx,
    groups_line: Option<u64>,
    diags: &mut Vec<Diagnostic>,
) {
    let fold = |k: &str| crate::text::fold_for_comparison(&k.replace(['_', '-'], " "));
    for key in group_by {
        if profile.groups.contains_key(key) {
            continue;
        }
        let near: Vec<String> = profile
            .groups
            .keys()
            .filter(|k| fold(k) == fold(key))
            .cloned()
            .collect();
        if let [written] = near.as_slice()
            && let Some(v) = profile.groups.remove(written)
        {
            ctx.note(format!(
                "group `{}` read as `{key}`, the name report.group_by gives it",
                crate::diag::printable(written)
            ));
            profile.groups.insert(key.clone(), v);
        } else if near.len() > 1 {
            let ways: Vec<String> = near
                .iter()
                .map(|k| format!("`{}`", crate::diag::printable(k)))
                .collect();
            let d = ctx
                .warning(format!(
                    "group `{key}` is written {} ways ({}), so which value counts cannot be \
                     known; the participant is counted under \"(not recorded)\" for `{key}`",
                    near.len(),
                    ways.join(", ")
                ))
                .field("groups")
                .expected(format!("`{key}:` once"))
                .found(ways.join(", "))
                .hint(format!("keep one of them, spelled `{key}`"));
            diags.push(match groups_line {
                Some(line) => d.at(line, None),
                None => d,
            });
        }
    }
}

#[cfg(test)]
mod tests;

//! The program definition, `program.yaml` (format version 1).
//!
//! [`ProgramDef`] is the file as written (serde, unknown keys refused); [`Program`] is the checked
//! result with resolved paths and the [`ProgramInfo`] every module receives. Loading and the
//! semantic checks live in [`load`].

pub mod files;
pub mod load;

pub use load::load_program;

use chrono::NaiveDate;
use cohortpress_metric_api::{ProgramInfo, UnitSystem};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;
use std::path::PathBuf;

/// The only format version this build reads.
pub const FORMAT_VERSION: u32 = 1;

/// `program.yaml` as written.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProgramDef {
    /// Must be 1.
    pub format_version: u32,
    /// Identity and dates.
    pub program: ProgramMetaDef,
    /// Display units (computation is always metric). Default `metric`.
    #[serde(default)]
    pub units: UnitSystem,
    /// Program targets; any key left out takes its default.
    #[serde(default)]
    pub targets: TargetsDef,
    /// Metric modules, in the order they run.
    pub modules: Vec<ModuleDef>,
    /// Report settings.
    #[serde(default)]
    pub report: ReportDef,
    /// Privacy settings for group reports.
    #[serde(default)]
    pub privacy: PrivacyDef,
    /// How input files are read.
    #[serde(default)]
    pub input: InputDef,
    /// Local activity labels: label → Compendium code or MET value.
    #[serde(default)]
    pub activities: BTreeMap<String, ActivityAliasDef>,
    /// Thresholds of the participant report's guidance (every key optional).
    #[serde(default)]
    pub guidance: GuidanceDef,
    /// The clinician follow-up list: written only when this names its recipient.
    #[serde(default)]
    pub followup: Option<FollowupDef>,
}

/// `guidance:` — thresholds of the decision table in `src/report/guidance.rs`. Every key is
/// optional; the defaults and their sources are in [`crate::report::guidance::Thresholds`].
/// Intake floors and the fastest safe loss in kg are the `energy` module's settings
/// (`intake_floor_female`, `intake_floor_male`, `max_safe_loss_kg_per_week`), so they are set
/// in one place.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct GuidanceDef {
    /// BMI at or above which loss may still be the goal (default 25, WHO).
    pub loss_bmi_at_least: Option<f64>,
    /// The same for people aged 70 or over (default 30: ESPEN 2019 geriatrics guideline,
    /// Volkert et al., Clin Nutr 38:10–47: weight-reducing diets only for obese older persons).
    pub loss_bmi_at_least_70_plus: Option<f64>,
    /// BMI below which any further loss is for a clinician (default 18.5, WHO).
    pub underweight_bmi_below: Option<f64>,
    /// Fastest loss an option may lead to, % of body weight a week (default 1, common practice).
    pub max_loss_percent_per_week: Option<f64>,
    /// Smallest intake change worth proposing, kcal a day (default 100, common practice).
    pub min_intake_change_kcal: Option<f64>,
    /// Smallest walking change worth proposing, minutes a day (default 10, common practice).
    pub min_walk_minutes: Option<f64>,
    /// Most walking an option may propose, minutes a day (default 60, common practice).
    pub max_walk_minutes: Option<f64>,
}

/// `followup:` — who receives the clinician follow-up list.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct FollowupDef {
    /// The person or role the list is for (`Program nurse, North Plant`), printed on it.
    pub recipient: String,
}

/// `program:` — identity and dates.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProgramMetaDef {
    /// Program id: letters, digits, `-`, `_`.
    pub id: String,
    /// Title shown on every report.
    pub title: String,
    /// Who sponsors the program (shown on group reports).
    #[serde(default)]
    pub sponsor: Option<String>,
    /// First day.
    pub start: NaiveDate,
    /// Last day.
    pub end: NaiveDate,
}

/// `targets:` — every key optional; defaults from [`cohortpress_metric_api::Targets::default`].
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct TargetsDef {
    /// % of baseline weight, negative = loss (default −5).
    pub weight_change_percent: Option<f64>,
    /// Moderate-equivalent minutes per week (default 150).
    pub activity_minutes_per_week: Option<f64>,
    /// Weigh-ins per week (default 3).
    pub weigh_ins_per_week: Option<f64>,
    /// Food-log days per week (default 5).
    pub food_log_days_per_week: Option<f64>,
    /// Group sessions offered over the program (default 16).
    pub sessions_offered: Option<u32>,
}

impl TargetsDef {
    /// Applies the keys given here on top of `base`.
    pub fn apply(&self, base: &cohortpress_metric_api::Targets) -> cohortpress_metric_api::Targets {
        cohortpress_metric_api::Targets {
            weight_change_percent: self
                .weight_change_percent
                .unwrap_or(base.weight_change_percent),
            activity_minutes_per_week: self
                .activity_minutes_per_week
                .unwrap_or(base.activity_minutes_per_week),
            weigh_ins_per_week: self.weigh_ins_per_week.unwrap_or(base.weigh_ins_per_week),
            food_log_days_per_week: self
                .food_log_days_per_week
                .unwrap_or(base.food_log_days_per_week),
            sessions_offered: self.sessions_offered.unwrap_or(base.sessions_offered),
        }
    }
}

/// One entry of `modules:`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ModuleDef {
    /// Module id: a built-in id (`trend`, `energy`, `adherence`, `outcomes`) or, with
    /// `command`, the id an external module answers with.
    pub id: String,
    /// External module: program and arguments (no shell). A first element with a `/` is resolved
    /// against the program folder; a bare name is looked up on PATH.
    #[serde(default)]
    pub command: Option<Vec<String>>,
    /// External module: seconds one call may take (default 30).
    #[serde(default)]
    pub timeout_seconds: Option<f64>,
    /// External module: when the command cannot be found, warn and skip instead of failing.
    #[serde(default)]
    pub optional: bool,
    /// The module's own settings, checked against the module's spec.
    #[serde(default)]
    pub with: Option<serde_yaml::Value>,
}

/// Report period used when the command line does not give one.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum DefaultPeriod {
    /// The last full calendar month before the as-of date, clipped to the program.
    #[default]
    LastFullMonth,
    /// From the program start to the as-of date (clipped to the program end).
    ProgramToDate,
}

/// An output format.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Format {
    /// Self-contained HTML.
    Html,
    /// PDF.
    Pdf,
}

/// `report:` — report settings.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ReportDef {
    /// Period when the command line gives none (default `last_full_month`).
    #[serde(default)]
    pub period: DefaultPeriod,
    /// Formats to write (default both).
    #[serde(default = "default_formats")]
    pub formats: Vec<Format>,
    /// Folder, relative to the program folder, whose files override the built-in templates
    /// file by file.
    #[serde(default)]
    pub templates: Option<PathBuf>,
    /// Group attributes to split the group report by (each value gets its own section).
    #[serde(default)]
    pub group_by: Vec<String>,
    /// Output folder, relative to the program folder (default `reports`).
    #[serde(default = "default_out")]
    pub out: PathBuf,
    /// State folder of the group-report ledger (what earlier group reports published),
    /// relative to the program folder. Default: the ledger beside `report.out` when it exists
    /// (also for runs into another folder), else the output folder's name plus `.ledger`,
    /// beside it. Never inside the program's inputs (`participants/`, the templates folder)
    /// nor inside the output folder; `--state DIR` on the command line wins.
    #[serde(default)]
    pub state_dir: Option<PathBuf>,
}

fn default_formats() -> Vec<Format> {
    vec![Format::Html, Format::Pdf]
}

fn default_out() -> PathBuf {
    PathBuf::from("reports")
}

impl Default for ReportDef {
    fn default() -> Self {
        ReportDef {
            period: DefaultPeriod::default(),
            formats: default_formats(),
            templates: None,
            group_by: Vec::new(),
            out: default_out(),
            state_dir: None,
        }
    }
}

/// `privacy:` — group report protection.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct PrivacyDef {
    /// Smallest count shown in a group report; counts from 1 to `min_cell_size − 1` are
    /// suppressed (default 11, after the CMS cell size suppression policy: no cell of 1 to 10).
    #[serde(default = "default_min_cell")]
    pub min_cell_size: u32,
}

fn default_min_cell() -> u32 {
    11
}

impl Default for PrivacyDef {
    fn default() -> Self {
        PrivacyDef {
            min_cell_size: default_min_cell(),
        }
    }
}

/// `input:` — how CSV files are read.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct InputDef {
    /// chrono format of dates in CSV files (default `%Y-%m-%d`); may include a time of day
    /// (`%Y-%m-%d %H:%M`) and an offset (`%z`). ISO 8601 dates and date-times are read whatever
    /// the format.
    #[serde(default = "default_date_format")]
    pub date_format: String,
    /// Field delimiter, one character; when left out it is recognised per file (comma,
    /// semicolon or tab).
    #[serde(default)]
    pub delimiter: Option<char>,
    /// The participants' local time zone (an IANA name such as `Europe/Berlin`, `UTC`, or a
    /// fixed offset `+01:00`): times stamped in UTC are converted to it to find the local day.
    #[serde(default)]
    pub time_zone: Option<String>,
    /// Column names of exports whose headers differ from ours, per file kind:
    /// `{ weights: { "Body Weight": weight } }`.
    #[serde(default)]
    pub columns: BTreeMap<String, BTreeMap<String, String>>,
    /// The encoding of participants' files that are not UTF-8 or UTF-16: left out, such a
    /// file is read as Windows-1252 when that is unambiguous, with a warning; `windows-1252`
    /// says the program's exports are so, and they are read with a note instead.
    #[serde(default)]
    pub encoding: InputEncoding,
}

/// `input.encoding`: what a participant's file that is not UTF-8 or UTF-16 is expected to be.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
pub enum InputEncoding {
    /// UTF-8 (or UTF-16) expected: any other file is a surprise, read as Windows-1252 only
    /// when unambiguous, with a warning.
    #[default]
    #[serde(rename = "utf-8")]
    Utf8,
    /// The program's exports are Windows-1252 (Western European spreadsheets' "CSV"): such a
    /// file is read with a note, no warning. UTF-8 and UTF-16 files are still read as such.
    #[serde(rename = "windows-1252")]
    Windows1252,
}

fn default_date_format() -> String {
    "%Y-%m-%d".into()
}

impl Default for InputDef {
    fn default() -> Self {
        InputDef {
            date_format: default_date_format(),
            delimiter: None,
            time_zone: None,
            columns: BTreeMap::new(),
            encoding: InputEncoding::default(),
        }
    }
}

/// One entry of `activities:` — a local activity label and what it means: a Compendium code
/// from the tool's table, or a MET value.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ActivityAliasDef {
    /// A 2011 Compendium code from the tool's activity table (`17190`), or one of its
    /// activity codes (`walking_3mph`).
    #[serde(default)]
    pub compendium: Option<String>,
    /// A MET value of the program's own.
    #[serde(default)]
    pub met: Option<f64>,
}

/// A loaded and checked program.
#[derive(Debug, Clone)]
pub struct Program {
    /// The program folder.
    pub root: PathBuf,
    /// The definition as written.
    pub def: ProgramDef,
    /// What modules receive.
    pub info: ProgramInfo,
    /// Line of each `modules:` entry in program.yaml (for diagnostics), by index.
    pub module_lines: BTreeMap<usize, u64>,
    /// The text of program.yaml as read, for the line and column of a key found wrong after
    /// loading (a module's id or setting: [`load::module_key_position`]); empty when the
    /// program was not read from text.
    pub source: String,
    /// Line of `guidance.underweight_bmi_below` in program.yaml, when set (for the check that it
    /// agrees with the `outcomes` module's cut-off).
    pub underweight_line: Option<u64>,
}

impl Program {
    /// The date of the instant `now` where the participants are, and where it was taken from
    /// (for the log): in `input.time_zone` when program.yaml sets it, else in the machine's time
    /// zone ([`machine_zone`]: known by its name, never by reading a file `TZ` names), else in
    /// UTC. The run's "today" (the default `--as-of`): on a machine whose day is behind the
    /// participants' (a server in UTC or America, a program in New Zealand), a weigh-in of the
    /// participants' today was "in the future" and dropped, and the run ended with warnings.
    pub fn date_at(&self, now: chrono::DateTime<chrono::Utc>) -> (NaiveDate, Today) {
        match self
            .def
            .input
            .time_zone
            .as_deref()
            .and_then(files::LocalZone::parse)
        {
            Some(zone) => (
                zone.local(now.fixed_offset()).date(),
                Today {
                    source: format!("in input.time_zone {} (program.yaml)", zone.name()),
                    unusual: false,
                },
            ),
            None => machine_date_at(now),
        }
    }
}

/// Where a command's "today" was taken from, in words for the log.
#[derive(Debug, Clone, PartialEq)]
pub struct Today {
    /// "in input.time_zone Europe/Berlin (program.yaml)", "in the machine's time zone …", "in
    /// UTC: TZ names a file, which is never read …".
    pub source: String,
    /// The machine's zone could not be used (UTC instead): worth a line even where the
    /// command's log is otherwise quiet.
    pub unusual: bool,
}

/// The machine's time zone as this tool reads it.
#[derive(Debug, Clone, PartialEq)]
pub enum MachineZone {
    /// A zone known by its IANA name (from `TZ`, or the link `/etc/localtime`).
    Zone(files::LocalZone),
    /// A POSIX rule in `TZ` (`<-12>12`, `CET-1CEST,M3.5.0,M10.5.0/3`), or a regular
    /// `/etc/localtime` of a sane size: chrono's local time reads it.
    Local,
    /// UTC: no zone, or one this tool does not read.
    Utc,
}

/// The largest `/etc/localtime` handed to chrono (a zone file is a few KiB).
const MAX_LOCALTIME_BYTES: u64 = 1 << 20;

/// The machine's time zone from `TZ` and `/etc/localtime`, and where it came from (for the
/// log), without reading any file `TZ` names. The time library reads the file `TZ` names
/// whole: `TZ=/dev/zero` (or `/dev/urandom`, a FIFO) made every command without `--as-of` read
/// forever. A zone name (`Europe/Berlin`, also in a path: `/usr/share/zoneinfo/Europe/Berlin`)
/// is read from the compiled-in IANA tables (chrono-tz), a POSIX rule by chrono, and any other
/// path or text gives UTC, which the log says.
pub fn machine_zone(
    tz: Option<&std::ffi::OsStr>,
    localtime: &std::path::Path,
) -> (MachineZone, String) {
    let by_name = |s: &str| -> Option<files::LocalZone> {
        let name = s
            .rfind("zoneinfo/")
            .map_or(s, |i| &s[i + "zoneinfo/".len()..]);
        (!name.contains(".."))
            .then(|| name.parse::<chrono_tz::Tz>().ok())
            .flatten()
            .map(files::LocalZone::Named)
    };
    // `TZ=localtime` is chrono's name for /etc/localtime: read as if TZ were unset.
    match tz.filter(|v| *v != "localtime" && *v != ":localtime") {
        Some(v) => {
            let text = v.to_string_lossy();
            let value = text.strip_prefix(':').unwrap_or(&text);
            let shown: String = value
                .chars()
                .take(80)
                .collect::<String>()
                .escape_debug()
                .to_string();
            if value.is_empty() {
                return (MachineZone::Utc, "in UTC (TZ is set and empty)".into());
            }
            if value.len() <= 256
                && let Some(z) = by_name(value)
            {
                let how = if value.contains('/') && value.contains("zoneinfo/") {
                    " (named by TZ's path; the file is not read)"
                } else {
                    " (TZ)"
                };
                return (
                    MachineZone::Zone(z),
                    format!("in the machine's time zone {}{how}", z.name()),
                );
            }
            let posix_rule = value.len() <= 256
                && !value.contains("..")
                && value
                    .chars()
                    .next()
                    .is_some_and(|c| c.is_ascii_alphabetic() || c == '<')
                && value.chars().all(|c| {
                    c.is_ascii_alphanumeric()
                        || matches!(c, '<' | '>' | '+' | '-' | ':' | ',' | '.' | '/')
                });
            if posix_rule {
                (
                    MachineZone::Local,
                    format!("in the machine's time zone rule TZ=\"{shown}\""),
                )
            } else {
                (
                    MachineZone::Utc,
                    format!(
                        "in UTC: TZ=\"{shown}\" is neither a time-zone name nor a rule, and a file it \
                         names is never read (set input.time_zone in program.yaml, or TZ to a \
                         name such as Europe/Berlin, or give --as-of)"
                    ),
                )
            }
        }
        None => {
            if let Ok(target) = std::fs::read_link(localtime)
                && let Some(z) = by_name(&target.to_string_lossy())
            {
                return (
                    MachineZone::Zone(z),
                    format!(
                        "in the machine's time zone {} ({})",
                        z.name(),
                        localtime.display()
                    ),
                );
            }
            match std::fs::metadata(localtime) {
                Ok(m) if m.is_file() && m.len() <= MAX_LOCALTIME_BYTES => (
                    MachineZone::Local,
                    format!("in the machine's time zone ({})", localtime.display()),
                ),
                Ok(_) => (
                    MachineZone::Utc,
                    format!(
                        "in UTC: {} is not a time-zone file of a sane size, and is not read",
                        localtime.display()
                    ),
                ),
                Err(_) => (
                    MachineZone::Utc,
                    format!("in UTC (no {})", localtime.display()),
                ),
            }
        }
    }
}

/// The date of `now` in the machine's time zone ([`machine_zone`] of this process's `TZ` and
/// `/etc/localtime`), and where it came from.
pub fn machine_date_at(now: chrono::DateTime<chrono::Utc>) -> (NaiveDate, Today) {
    let (zone, source) = machine_zone(
        std::env::var_os("TZ").as_deref(),
        std::path::Path::new("/etc/localtime"),
    );
    let date = match &zone {
        MachineZone::Zone(z) => z.local(now.fixed_offset()).date(),
        MachineZone::Local => now.with_timezone(&chrono::Local).date_naive(),
        MachineZone::Utc => now.date_naive(),
    };
    let unusual = zone == MachineZone::Utc && source.starts_with("in UTC:");
    (date, Today { source, unusual })
}

#[cfg(test)]
mod tests {
    use super::{MachineZone, machine_zone};
    use std::ffi::OsStr;

    /// Without `TZ`, the zone is the name `/etc/localtime` links to; a regular file of a sane
    /// size is left to chrono, and anything else (a FIFO, a directory, nothing) gives UTC
    /// without being read.
    #[test]
    fn the_machine_zone_without_tz_never_reads_what_is_not_a_zone_file() {
        let dir = tempfile::tempdir().unwrap();
        let link = dir.path().join("localtime");
        std::os::unix::fs::symlink("/usr/share/zoneinfo/Asia/Tokyo", &link).unwrap();
        let (zone, says) = machine_zone(None, &link);
        assert!(
            matches!(zone, MachineZone::Zone(z) if z.name() == "Asia/Tokyo"),
            "{says}"
        );
        let file = dir.path().join("file");
        std::fs::write(&file, b"TZif").unwrap();
        assert_eq!(machine_zone(None, &file).0, MachineZone::Local);
        // `TZ=localtime` is chrono's name for /etc/localtime, which is judged as above.
        assert_eq!(
            machine_zone(Some(OsStr::new("localtime")), &file).0,
            MachineZone::Local
        );
        let fifo = dir.path().join("fifo");
        assert!(
            std::process::Command::new("mkfifo")
                .arg(&fifo)
                .status()
                .unwrap()
                .success()
        );
        for p in [fifo, dir.path().to_path_buf(), dir.path().join("none")] {
            let (zone, says) = machine_zone(None, &p);
            assert_eq!(zone, MachineZone::Utc, "{}: {says}", p.display());
        }
        // A zone name with `..` is not looked up (chrono would open the path it makes).
        let (zone, _) = machine_zone(Some(OsStr::new("../../../dev/zero")), &link);
        assert_eq!(zone, MachineZone::Utc);
        let (zone, _) = machine_zone(Some(OsStr::new("Europe/../../dev/zero")), &link);
        assert_eq!(zone, MachineZone::Utc);
    }
}

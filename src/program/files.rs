//! The participant files' contract: the columns each CSV file must and may have, the accepted
//! MET range and the participants' local time zone. `program.yaml`'s `input:` section is
//! checked against them here, and the participant readers (`crate::participant`) read by them.

use chrono::{DateTime, FixedOffset, LocalResult, NaiveDateTime, TimeZone};

/// The participants' local time zone (`input.time_zone`): an IANA zone or a fixed offset.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum LocalZone {
    /// An IANA time zone such as `Europe/Berlin` (daylight saving time applied).
    Named(chrono_tz::Tz),
    /// A fixed offset from UTC such as `+01:00`.
    Fixed(FixedOffset),
}

impl LocalZone {
    /// Reads `UTC`, an IANA name or an offset `+HH:MM` / `-HH:MM`.
    pub fn parse(s: &str) -> Option<LocalZone> {
        let s = s.trim();
        if let Ok(tz) = s.parse::<chrono_tz::Tz>() {
            return Some(LocalZone::Named(tz));
        }
        let (sign, rest) = match s.as_bytes().first()? {
            b'+' => (1, &s[1..]),
            b'-' => (-1, &s[1..]),
            _ => return None,
        };
        let (h, m) = rest.split_once(':').unwrap_or((rest, "0"));
        let (h, m): (i32, i32) = (h.parse().ok()?, m.parse().ok()?);
        if !(0..=14).contains(&h) || !(0..60).contains(&m) {
            return None;
        }
        FixedOffset::east_opt(sign * (h * 3600 + m * 60)).map(LocalZone::Fixed)
    }

    /// The local date and time of an instant.
    pub(crate) fn local(&self, t: DateTime<FixedOffset>) -> NaiveDateTime {
        match self {
            LocalZone::Named(tz) => t.with_timezone(tz).naive_local(),
            LocalZone::Fixed(o) => t.with_timezone(o).naive_local(),
        }
    }

    /// The instant a local date and time written without an offset stands for: one, two (an
    /// hour that exists twice when the clocks go back, earlier offset first) or none (an hour
    /// the clocks skip when they go forward), by the zone's rules (IANA tzdata via chrono-tz).
    pub(crate) fn resolve(&self, t: NaiveDateTime) -> LocalResult<DateTime<FixedOffset>> {
        match self {
            LocalZone::Named(tz) => tz.from_local_datetime(&t).map(|x| x.fixed_offset()),
            LocalZone::Fixed(o) => o.from_local_datetime(&t),
        }
    }

    pub(crate) fn name(&self) -> String {
        match self {
            LocalZone::Named(tz) => tz.name().to_string(),
            LocalZone::Fixed(o) => o.to_string(),
        }
    }
}

/// The columns a file must and may have.
#[derive(Debug, Clone, Copy)]
pub struct FileSpec {
    /// File name, e.g. `weights.csv`.
    pub name: &'static str,
    /// Columns that must be present.
    pub required: &'static [&'static str],
    /// Columns that may be present.
    pub optional: &'static [&'static str],
    /// Other header names read as one of our columns (after [`header_key`]).
    pub aliases: &'static [(&'static str, &'static str)],
    /// Columns whose header may carry a unit (`Weight (lb)`): the units accepted (empty: any,
    /// checked row by row) and the unit column such a header makes unnecessary.
    pub header_units: &'static [(&'static str, &'static [&'static str], Option<&'static str>)],
}

impl FileSpec {
    /// The file kind used in `input.columns` (`weights` for `weights.csv`).
    pub fn kind(&self) -> &'static str {
        self.name.strip_suffix(".csv").unwrap_or(self.name)
    }

    /// Every column name of the file.
    pub fn all_columns(&self) -> impl Iterator<Item = &'static str> {
        self.required.iter().chain(self.optional).copied()
    }

    /// The column (and unit, if it names one) that a target of program.yaml's `input.columns`
    /// stands for: one of our columns as a header would name it, `weight`, `weight (kg)` or
    /// `weight_kg` (for an export whose `Weight` column holds bare numbers, so that its unit is
    /// said once for every file rather than written into each). `None` when the target is not
    /// one of the file's columns, or names a unit that column does not take.
    pub fn mapping_target(&self, target: &str) -> Option<(&'static str, Option<String>)> {
        let (key, unit) = header_key(target);
        let allows = |c: &str, u: &str| {
            self.header_units
                .iter()
                .any(|(v, allowed, _)| *v == c && (allowed.is_empty() || allowed.contains(&u)))
        };
        if let Some(c) = self.all_columns().find(|c| *c == key) {
            return match unit {
                Some(u) if !allows(c, &u) => None,
                u => Some((c, u)),
            };
        }
        let (base, u) = key.rsplit_once('_')?;
        let c = self.all_columns().find(|c| *c == base)?;
        (unit.is_none() && allows(c, u)).then(|| (c, Some(u.to_string())))
    }
}

/// Lowercases a header, takes off a unit in brackets (`Weight (lb)` → `weight`, `lb`), folds
/// accents (`Énergie` → `energie`: canonical decomposition, NFD, with the combining marks
/// dropped, so a letter typed as one character or as a letter and an accent reads the same) and
/// writes every run of other characters as one `_` (`Body Weight` → `body_weight`). The aliases
/// are written without accents; an accented header (`Énergie (kcal)` of a French food app) did
/// not match `energie`, and a decomposed one split at its accent (`e_nergie`).
pub fn header_key(h: &str) -> (String, Option<String>) {
    use unicode_normalization::UnicodeNormalization;
    use unicode_normalization::char::is_combining_mark;
    let h = h.trim().trim_start_matches('\u{feff}');
    let mut unit = None;
    let mut base = h;
    for (open, close) in [('(', ')'), ('[', ']')] {
        if let Some(rest) = h.strip_suffix(close)
            && let Some(at) = rest.rfind(open)
        {
            let u = rest[at + 1..].trim().to_lowercase();
            if !u.is_empty() {
                unit = Some(u);
            }
            base = &rest[..at];
            break;
        }
    }
    let mut key = String::with_capacity(base.len());
    for c in base
        .trim()
        .nfd()
        .filter(|c| !is_combining_mark(*c))
        .flat_map(char::to_lowercase)
    {
        if c.is_alphanumeric() {
            key.push(c);
        } else if !key.ends_with('_') {
            key.push('_');
        }
    }
    let key = key.trim_matches('_').to_string();
    (key, unit)
}

/// Units a weight column's header may carry.
const MASS_UNITS: &[&str] = &[
    "kg",
    "kgs",
    "kilogram",
    "kilograms",
    "lb",
    "lbs",
    "pound",
    "pounds",
    "st",
    "stone",
    "stones",
    // Grams, as some scales and health apps export body weight (`weight_g`, `Weight (g)`):
    // converted to kilograms where the header, a `unit` cell or the cell itself says so.
    "g",
    "gram",
    "grams",
];

/// `weights.csv`.
pub const WEIGHTS: FileSpec = FileSpec {
    name: "weights.csv",
    required: &["date", "weight", "unit"],
    optional: &["time", "source"],
    aliases: &[
        ("day", "date"),
        ("datetime", "date"),
        ("date_time", "date"),
        ("timestamp", "date"),
        ("measured_at", "date"),
        // Phone health apps' weight tables: the measurement's time.
        ("start_time", "date"),
        ("body_weight", "weight"),
        ("bodyweight", "weight"),
        ("mass", "weight"),
        ("body_mass", "weight"),
        ("weight_unit", "unit"),
        ("units", "unit"),
        ("device", "source"),
        // Phone health apps (`Weight & Body Mass (kg)`) and German-language scales
        // (`Datum`, `Gewicht (kg)`, `Einheit`).
        ("weight_body_mass", "weight"),
        ("datum", "date"),
        ("gewicht", "weight"),
        ("einheit", "unit"),
    ],
    header_units: &[("weight", MASS_UNITS, Some("unit"))],
};
/// `intake.csv`.
pub const INTAKE: FileSpec = FileSpec {
    name: "intake.csv",
    required: &["date", "kcal"],
    optional: &["carbs_g", "fat_g", "protein_g", "free_sugars_g", "time"],
    aliases: &[
        ("day", "date"),
        ("datetime", "date"),
        ("timestamp", "date"),
        ("calories", "kcal"),
        ("calories_in", "kcal"),
        // Diaries that also list what was burned (`Calories consumed`, `Calories burned`) or
        // print a daily total (`Total Calories`): the column of what was eaten.
        ("calories_consumed", "kcal"),
        ("energy_consumed", "kcal"),
        ("total_calories", "kcal"),
        ("total_energy", "kcal"),
        ("dietary_energy", "kcal"),
        ("datum", "date"),
        ("energy", "kcal"),
        ("energy_kcal", "kcal"),
        ("carbs", "carbs_g"),
        ("carbohydrate", "carbs_g"),
        ("carbohydrates", "carbs_g"),
        ("fat", "fat_g"),
        ("protein", "protein_g"),
        ("free_sugars", "free_sugars_g"),
        // German-language food diaries, as for weights (`Datum`, `Kalorien (kcal)`,
        // `Energie (kJ)`, `Kohlenhydrate (g)`, `Fett (g)`, `Eiweiß (g)`): `Kalorien (kcal)` was
        // not read and the file was refused for a missing `kcal`.
        ("kalorien", "kcal"),
        ("energie", "kcal"),
        ("kohlenhydrate", "carbs_g"),
        ("fett", "fat_g"),
        ("eiweiß", "protein_g"),
        ("eiweiss", "protein_g"),
    ],
    header_units: &[
        ("kcal", &["kcal", "cal", "kj"], None),
        ("carbs_g", &["g"], None),
        ("fat_g", &["g"], None),
        ("protein_g", &["g"], None),
        ("free_sugars_g", &["g"], None),
    ],
};
/// `activity.csv`.
pub const ACTIVITY: FileSpec = FileSpec {
    name: "activity.csv",
    required: &["date", "activity", "minutes"],
    optional: &["met", "steps", "time"],
    aliases: &[
        ("day", "date"),
        ("datetime", "date"),
        ("timestamp", "date"),
        ("start", "date"),
        ("start_time", "date"),
        ("activity_type", "activity"),
        ("activity_name", "activity"),
        ("workout", "activity"),
        ("workout_type", "activity"),
        ("exercise", "activity"),
        ("type", "activity"),
        ("duration", "minutes"),
        ("mins", "minutes"),
        ("duration_min", "minutes"),
        ("duration_minutes", "minutes"),
        ("mets", "met"),
        ("step_count", "steps"),
        // German-language exports, as for weights and intake.
        ("datum", "date"),
    ],
    // Seconds too (`Duration (s)`, as workout exports write it): converted to minutes. A
    // clock pattern (`Duration (h:mm)`) says how the column's clock durations are written.
    header_units: &[(
        "minutes",
        &[
            "min", "mins", "minutes", "h", "hr", "hours", "s", "sec", "secs", "seconds", "h:mm",
            "hh:mm", "h:mm:ss", "hh:mm:ss", "mm:ss", "m:ss",
        ],
        None,
    )],
};

/// Headers of an activity's start and of its end (after [`header_key`]). An activity file
/// with one of each and no duration column has its durations read as end − start, dated by
/// the start; with a duration column, the start dates the row.
pub const ACTIVITY_STARTS: &[&str] = &[
    "start",
    "start_time",
    "start_date",
    "start_datetime",
    "start_date_time",
    "started",
    "started_at",
    "begin",
    "begin_time",
];
/// See [`ACTIVITY_STARTS`].
pub const ACTIVITY_ENDS: &[&str] = &[
    "end",
    "end_time",
    "end_date",
    "end_datetime",
    "end_date_time",
    "ended",
    "ended_at",
    "finish",
    "finish_time",
    "stop",
    "stop_time",
];
/// `sessions.csv`.
pub const SESSIONS: FileSpec = FileSpec {
    name: "sessions.csv",
    required: &["date", "session", "attended"],
    optional: &[],
    aliases: &[
        ("day", "date"),
        ("attendance", "attended"),
        ("present", "attended"),
        ("datum", "date"),
    ],
    header_units: &[],
};
/// `labs.csv`.
pub const LABS: FileSpec = FileSpec {
    name: "labs.csv",
    required: &["date", "test", "value"],
    optional: &["unit"],
    aliases: &[
        ("day", "date"),
        ("datetime", "date"),
        ("test_name", "test"),
        ("analyte", "test"),
        ("result", "value"),
        ("units", "unit"),
        ("datum", "date"),
    ],
    header_units: &[("value", &[], None)],
};
/// Every CSV file a participant folder may hold.
pub const ALL_FILES: [FileSpec; 5] = [WEIGHTS, INTAKE, ACTIVITY, SESSIONS, LABS];

/// Accepted MET values: 1 (rest) to 23 (the highest values in the 2011 Compendium, running at
/// about 14 mph; common practice to use it as the ceiling).
pub const MET_RANGE: (f64, f64) = (1.0, 23.0);

//! The five CSV files of a participant folder: parsing each row, then the checks that need the
//! whole file (duplicates, dates outside the participant's time in the program, a weigh-in in the
//! wrong unit, daily totals). Parsers take the file's text, so they are tested on strings.
//!
//! Policy: a bad value drops its row (or only the value, for optional columns) with a warning; a
//! file whose shape cannot be trusted (missing column) is an error. Every list comes out sorted
//! by date.

use super::table::{Cells, CsvOptions, Dropped, FileCtx, FileSpec, Table, read_table};
use crate::activities;
use crate::diag::Diagnostic;
use chrono::{Datelike, NaiveDate, NaiveTime};
use cohortpress_metric_api::units::{
    CM_PER_IN, KG_PER_LB, Mass, glucose_mgdl_to_mmoll, hba1c_mmolmol_to_percent,
};
use cohortpress_metric_api::{
    ActivityEntry, IntakeDay, LabResult, LabTest, SessionRecord, WeighIn,
};
use std::collections::{BTreeMap, HashMap};
use std::fmt::Debug;

/// `weights.csv`.
pub const WEIGHTS: FileSpec = FileSpec {
    name: "weights.csv",
    required: &["date", "weight", "unit"],
    optional: &["time", "source"],
};
/// `intake.csv`.
pub const INTAKE: FileSpec = FileSpec {
    name: "intake.csv",
    required: &["date", "kcal"],
    optional: &["carbs_g", "fat_g", "protein_g", "free_sugars_g"],
};
/// `activity.csv`.
pub const ACTIVITY: FileSpec = FileSpec {
    name: "activity.csv",
    required: &["date", "activity", "minutes"],
    optional: &["met", "steps"],
};
/// `sessions.csv`.
pub const SESSIONS: FileSpec = FileSpec {
    name: "sessions.csv",
    required: &["date", "session", "attended"],
    optional: &[],
};
/// `labs.csv`.
pub const LABS: FileSpec = FileSpec {
    name: "labs.csv",
    required: &["date", "test", "value", "unit"],
    optional: &[],
};

/// Plausible body weight, kg (common practice: outside this range a value is a typing or unit
/// error, not a person in a lifestyle program).
pub const WEIGHT_KG_RANGE: (f64, f64) = (25.0, 350.0);
/// Plausible logged intake per day, kcal: above 0 and at most this (common practice).
pub const MAX_KCAL_PER_DAY: f64 = 10_000.0;
/// Most minutes one activity row, or one day's rows together, can hold: 16 waking hours
/// (common practice).
pub const MAX_ACTIVITY_MINUTES: f64 = 960.0;
/// Accepted MET values: 1 (rest) to 23 (the highest values in the 2011 Compendium, running at
/// about 14 mph; common practice to use it as the ceiling).
pub const MET_RANGE: (f64, f64) = (1.0, 23.0);
/// Pounds per kilogram (1 / 0.45359237, exact factor of 1959).
pub const LB_PER_KG: f64 = 1.0 / KG_PER_LB;
/// A weigh-in within ±6 % of 2.2046 times its neighbours is read as written in the other unit
/// (common practice: day-to-day weight varies by far less than 6 %).
pub const UNIT_SWAP_TOLERANCE: f64 = 0.06;
/// Neighbours of a weigh-in for the unit check: other weigh-ins within this many days
/// (common practice).
pub const UNIT_SWAP_WINDOW_DAYS: i64 = 14;

/// The days a participant's data may fall on.
#[derive(Debug, Clone, Copy)]
pub struct Window {
    /// Enrolment date (data before it are dropped), when known.
    pub enrolled: Option<NaiveDate>,
    /// Withdrawal date (data after it are dropped), when any.
    pub withdrew: Option<NaiveDate>,
    /// The run's "today": later data are future data and dropped.
    pub as_of: NaiveDate,
}

/// A parsed row before the whole-file checks.
#[derive(Debug, Clone)]
struct Parsed<T> {
    line: u64,
    date: NaiveDate,
    value: T,
}

/// Reads the rows of `table` through `f`, skipping rows `f` refuses.
fn parse_rows<T>(
    table: &Table,
    ctx: &FileCtx,
    opts: &CsvOptions,
    diags: &mut Vec<Diagnostic>,
    mut f: impl FnMut(&Cells<'_>, &mut Vec<Diagnostic>) -> Option<T>,
) -> Vec<Parsed<T>> {
    let mut out = Vec::new();
    for row in &table.rows {
        let cells = Cells {
            table,
            row,
            ctx,
            opts,
        };
        let Some(date) = cells.date("date", diags) else {
            continue;
        };
        if let Some(value) = f(&cells, diags) {
            out.push(Parsed {
                line: row.line,
                date,
                value,
            });
        }
    }
    out
}

/// Equality of parsed values for [`dedupe`]: exactly "prints the same with `{:?}`" (floats print
/// round-trip exactly, so two floats are the same when their bits are, and every NaN prints
/// `NaN`), without building the text.
trait SameValue: Debug {
    fn same_value(&self, other: &Self) -> bool;
}

fn same_f64(a: f64, b: f64) -> bool {
    a.to_bits() == b.to_bits() || (a.is_nan() && b.is_nan())
}

fn same_opt_f64(a: Option<f64>, b: Option<f64>) -> bool {
    match (a, b) {
        (Some(a), Some(b)) => same_f64(a, b),
        (None, None) => true,
        _ => false,
    }
}

/// Rows of one date beyond which [`dedupe`] compares by hashed keys instead of pairwise (a
/// pathological file with thousands of rows on one day must not take quadratic time).
const PAIRWISE_MAX: usize = 16;

/// Drops rows identical (after parsing) to an earlier row.
fn dedupe<T: SameValue>(
    rows: Vec<Parsed<T>>,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Vec<Parsed<T>> {
    // Only rows of the same date can be duplicates: group the rows by date (a stable sort keeps
    // file order within a date) and compare within each group. Building a text key for every
    // row instead was a sixth of the loading time.
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by_key(|&i| rows[i].date);
    let mut duplicate_of: Vec<Option<u64>> = vec![None; rows.len()];
    for group in order.chunk_by(|&a, &b| rows[a].date == rows[b].date) {
        if group.len() <= PAIRWISE_MAX {
            for (k, &i) in group.iter().enumerate() {
                duplicate_of[i] = group[..k]
                    .iter()
                    .find(|&&j| {
                        duplicate_of[j].is_none() && rows[j].value.same_value(&rows[i].value)
                    })
                    .map(|&j| rows[j].line);
            }
        } else {
            let mut first: HashMap<String, u64> = HashMap::with_capacity(group.len());
            for &i in group {
                let key = format!("{:?}", rows[i].value);
                match first.get(&key) {
                    Some(&line) => duplicate_of[i] = Some(line),
                    None => {
                        first.insert(key, rows[i].line);
                    }
                }
            }
        }
    }
    let mut out = Vec::with_capacity(rows.len());
    for (r, dup) in rows.into_iter().zip(duplicate_of) {
        match dup {
            Some(line) => diags.push(
                ctx.warning(format!("duplicate of line {line}; the row is dropped"))
                    .at(r.line, None)
                    .hint("remove repeated rows (a file exported twice and pasted together?)"),
            ),
            None => out.push(r),
        }
    }
    out
}

/// Drops rows dated after `as_of`, before enrolment or after withdrawal.
fn in_window<T>(
    rows: Vec<Parsed<T>>,
    w: &Window,
    table: &Table,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Vec<Parsed<T>> {
    let col = table.column("date");
    rows.into_iter()
        .filter(|r| {
            let problem = if r.date > w.as_of {
                Some((
                    format!(
                        "date {} is in the future (after the as-of date {}); the row is dropped",
                        r.date, w.as_of
                    ),
                    format!("a date on or before {}", w.as_of),
                    "check the year; run with a later `--as-of` if the data are real",
                ))
            } else if w.enrolled.is_some_and(|e| r.date < e) {
                let e = w.enrolled.expect("checked");
                Some((
                    format!(
                        "date {} is before enrolment ({e}); the row is dropped",
                        r.date
                    ),
                    format!("a date on or after {e}"),
                    "check the date, or the `enrolled` date in profile.yaml",
                ))
            } else if w.withdrew.is_some_and(|x| r.date > x) {
                let x = w.withdrew.expect("checked");
                Some((
                    format!(
                        "date {} is after withdrawal ({x}); the row is dropped",
                        r.date
                    ),
                    format!("a date on or before {x}"),
                    "check the date, or the `withdrew` date in profile.yaml",
                ))
            } else {
                None
            };
            match problem {
                Some((msg, expected, hint)) => {
                    diags.push(
                        ctx.warning(msg)
                            .at(r.line, col)
                            .field("date")
                            .expected(expected)
                            .found(r.date.to_string())
                            .hint(hint),
                    );
                    false
                }
                None => true,
            }
        })
        .collect()
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum WeightUnit {
    Kg,
    Lb,
}

#[derive(Debug, Clone)]
struct RawWeight {
    time: Option<String>,
    value: f64,
    unit: WeightUnit,
    source: Option<String>,
}

impl SameValue for RawWeight {
    fn same_value(&self, o: &Self) -> bool {
        same_f64(self.value, o.value)
            && self.unit == o.unit
            && self.time == o.time
            && self.source == o.source
    }
}

impl RawWeight {
    fn kg_as_written(&self) -> f64 {
        match self.unit {
            WeightUnit::Kg => self.value,
            WeightUnit::Lb => Mass::from_lb(self.value).kg(),
        }
    }
}

/// The median of a non-empty slice (reorders it): the middle order statistic, or the mean of
/// the two middle ones, found by selection rather than a full sort.
fn median(v: &mut [f64]) -> f64 {
    let n = v.len();
    let (below, &mut upper, _) = v.select_nth_unstable_by(n / 2, f64::total_cmp);
    if n % 2 == 1 {
        upper
    } else {
        let lower = below
            .iter()
            .copied()
            .max_by(f64::total_cmp)
            .expect("n is even and at least 2");
        (lower + upper) / 2.0
    }
}

fn plausible_kg(kg: f64) -> bool {
    kg >= WEIGHT_KG_RANGE.0 && kg <= WEIGHT_KG_RANGE.1
}

/// Parses `weights.csv`. `None` when the file cannot be used (an error was pushed).
pub fn parse_weights(
    text: &str,
    opts: &CsvOptions,
    ctx: &FileCtx,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<WeighIn>> {
    let table = read_table(text, &WEIGHTS, opts, ctx, diags)?;
    let rows = parse_rows(&table, ctx, opts, diags, |c, d| {
        let value = c.number("weight", d)?;
        let unit_text = c.required_text("unit", d)?;
        let unit = match unit_text.to_lowercase().as_str() {
            "kg" | "kgs" | "kilogram" | "kilograms" => WeightUnit::Kg,
            "lb" | "lbs" | "pound" | "pounds" => WeightUnit::Lb,
            _ => {
                d.push(
                    c.warn("unit", "unknown weight unit; the row is dropped")
                        .expected("`kg` or `lb`")
                        .found(format!("`{unit_text}`")),
                );
                return None;
            }
        };
        let time = c
            .text("time")
            .and_then(|t| match NaiveTime::parse_from_str(t, "%H:%M") {
                Ok(tm) => Some(tm.format("%H:%M").to_string()),
                Err(_) => {
                    d.push(
                        c.warn("time", "unreadable time; the time is ignored")
                            .expected("a time of day HH:MM, e.g. `07:30`")
                            .found(format!("`{t}`")),
                    );
                    None
                }
            });
        Some(RawWeight {
            time,
            value,
            unit,
            source: c.text("source").map(str::to_string),
        })
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, &table, ctx, diags);

    // A weigh-in in the wrong unit: compare with the median of the other weigh-ins within
    // ±14 days (only plausible ones) and look for the lb/kg factor.
    let written: Vec<f64> = rows.iter().map(|r| r.value.kg_as_written()).collect();
    let mut kg = written.clone();
    let wcol = table.column("weight");
    // Row indices in date order: the neighbours of a weigh-in are then one contiguous run,
    // found by binary search instead of a scan of the whole file per row.
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by_key(|&j| rows[j].date);
    // Day numbers, so the searches compare integers.
    let day = |d: NaiveDate| i64::from(d.num_days_from_ce());
    let days: Vec<i64> = order.iter().map(|&j| day(rows[j].date)).collect();
    let mut others: Vec<f64> = Vec::new();
    for (i, r) in rows.iter().enumerate() {
        let today = day(r.date);
        let lo = days.partition_point(|&d| today - d > UNIT_SWAP_WINDOW_DAYS);
        let hi = days.partition_point(|&d| d - today <= UNIT_SWAP_WINDOW_DAYS);
        others.clear();
        others.extend(
            order[lo..hi]
                .iter()
                .filter(|&&j| j != i && plausible_kg(written[j]))
                .map(|&j| written[j]),
        );
        if others.is_empty() {
            continue;
        }
        let med = median(&mut others);
        let ratio = written[i] / med;
        let near = |target: f64| (ratio / target - 1.0).abs() <= UNIT_SWAP_TOLERANCE;
        let v = r.value.value;
        let (msg, corrected) = match r.value.unit {
            WeightUnit::Kg if near(LB_PER_KG) => (
                format!(
                    "weight {v} kg is about 2.2 times the other weigh-ins within {UNIT_SWAP_WINDOW_DAYS} days (median {med:.1} kg); it looks like pounds and is read as {v} lb = {:.1} kg",
                    Mass::from_lb(v).kg()
                ),
                Mass::from_lb(v).kg(),
            ),
            WeightUnit::Lb if near(1.0 / LB_PER_KG) => (
                format!(
                    "weight {v} lb is about 0.45 times the other weigh-ins within {UNIT_SWAP_WINDOW_DAYS} days (median {:.1} lb); it looks like kilograms and is read as {v} kg",
                    Mass::from_kg(med).lb()
                ),
                v,
            ),
            _ => continue,
        };
        kg[i] = corrected;
        diags.push(
            ctx.warning(msg)
                .at(r.line, wcol)
                .field("weight")
                .found(format!(
                    "`{v}` with unit `{}`",
                    if r.value.unit == WeightUnit::Kg {
                        "kg"
                    } else {
                        "lb"
                    }
                ))
                .hint("check the `unit` column of this row and correct it"),
        );
    }

    let mut out = Vec::new();
    for (r, kg) in rows.into_iter().zip(kg) {
        if !plausible_kg(kg) {
            let shown = match r.value.unit {
                WeightUnit::Kg => format!("`{}` kg", r.value.value),
                WeightUnit::Lb => format!("`{}` lb", r.value.value),
            };
            diags.push(
                ctx.warning("implausible weight; the row is dropped")
                    .at(r.line, wcol)
                    .field("weight")
                    .expected(format!(
                        "a weight between {} and {} kg ({:.0} to {:.0} lb)",
                        WEIGHT_KG_RANGE.0,
                        WEIGHT_KG_RANGE.1,
                        Mass::from_kg(WEIGHT_KG_RANGE.0).lb(),
                        Mass::from_kg(WEIGHT_KG_RANGE.1).lb()
                    ))
                    .found(shown)
                    .hint("check for a typing error or a wrong unit"),
            );
            continue;
        }
        out.push(WeighIn {
            date: r.date,
            time: r.value.time,
            weight: Mass::from_kg(kg),
            source: r.value.source,
        });
    }
    out.sort_by(|a, b| (a.date, &a.time).cmp(&(b.date, &b.time)));
    Some(out)
}

#[derive(Debug, Clone)]
struct RawIntake {
    kcal: f64,
    macros: [Option<f64>; 4],
}

impl SameValue for RawIntake {
    fn same_value(&self, o: &Self) -> bool {
        same_f64(self.kcal, o.kcal)
            && self
                .macros
                .iter()
                .zip(&o.macros)
                .all(|(a, b)| same_opt_f64(*a, *b))
    }
}

const MACROS: [&str; 4] = ["carbs_g", "fat_g", "protein_g", "free_sugars_g"];

/// Parses `intake.csv`; several rows a day are summed into one [`IntakeDay`].
pub fn parse_intake(
    text: &str,
    opts: &CsvOptions,
    ctx: &FileCtx,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<IntakeDay>> {
    let table = read_table(text, &INTAKE, opts, ctx, diags)?;
    let rows = parse_rows(&table, ctx, opts, diags, |c, d| {
        let kcal = c.number("kcal", d)?;
        if kcal < 0.0 {
            d.push(
                c.warn("kcal", "negative energy; the row is dropped")
                    .expected("kcal ≥ 0")
                    .found(format!("`{kcal}`")),
            );
            return None;
        }
        let mut macros = [None; 4];
        for (slot, col) in macros.iter_mut().zip(MACROS) {
            match c.optional_number(col, "the value is ignored", d) {
                Ok(Some(v)) if v < 0.0 => d.push(
                    c.warn(col, format!("negative `{col}`; the value is ignored"))
                        .expected("grams ≥ 0")
                        .found(format!("`{v}`")),
                ),
                Ok(v) => *slot = v,
                Err(Dropped) => {}
            }
        }
        Some(RawIntake { kcal, macros })
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, &table, ctx, diags);

    struct Day {
        kcal: f64,
        macros: [Option<f64>; 4],
        lines: Vec<u64>,
    }
    let mut days: BTreeMap<NaiveDate, Day> = BTreeMap::new();
    for r in rows {
        match days.get_mut(&r.date) {
            None => {
                days.insert(
                    r.date,
                    Day {
                        kcal: r.value.kcal,
                        macros: r.value.macros,
                        lines: vec![r.line],
                    },
                );
            }
            Some(day) => {
                day.kcal += r.value.kcal;
                // A nutrient total is only known when every row of the day gives it; a partial
                // sum would understate the day.
                for (m, add) in day.macros.iter_mut().zip(r.value.macros) {
                    *m = match (*m, add) {
                        (Some(a), Some(b)) => Some(a + b),
                        _ => None,
                    };
                }
                day.lines.push(r.line);
            }
        }
    }
    let kcol = table.column("kcal");
    let mut out = Vec::new();
    for (date, day) in days {
        if day.kcal <= 0.0 || day.kcal > MAX_KCAL_PER_DAY {
            let lines = day
                .lines
                .iter()
                .map(u64::to_string)
                .collect::<Vec<_>>()
                .join(", ");
            diags.push(
                ctx.warning(format!(
                    "implausible intake of {} kcal on {date} (line{} {lines}); the day is dropped",
                    day.kcal,
                    if day.lines.len() == 1 { "" } else { "s" }
                ))
                .at(day.lines[0], kcol)
                .field("kcal")
                .expected(format!(
                    "a daily total above 0 and at most {MAX_KCAL_PER_DAY} kcal"
                ))
                .found(format!("{} kcal", day.kcal))
                .hint("check for a typing error (an extra digit, kJ instead of kcal)"),
            );
            continue;
        }
        let [carbs_g, fat_g, protein_g, free_sugars_g] = day.macros;
        out.push(IntakeDay {
            date,
            kcal: day.kcal,
            carbs_g,
            fat_g,
            protein_g,
            free_sugars_g,
        });
    }
    Some(out)
}

/// A parsed activity row: (activity, minutes, MET, source of the MET, steps).
type RawActivity = (String, f64, f64, String, Option<f64>);

impl SameValue for RawActivity {
    fn same_value(&self, o: &Self) -> bool {
        self.0 == o.0
            && same_f64(self.1, o.1)
            && same_f64(self.2, o.2)
            && self.3 == o.3
            && same_opt_f64(self.4, o.4)
    }
}

impl SameValue for (String, bool) {
    fn same_value(&self, o: &Self) -> bool {
        self == o
    }
}

impl SameValue for LabResult {
    fn same_value(&self, o: &Self) -> bool {
        self.date == o.date
            && self.test == o.test
            && same_f64(self.value, o.value)
            && self.unit_as_written == o.unit_as_written
            && same_f64(self.value_as_written, o.value_as_written)
    }
}

/// Parses `activity.csv`: codes from the activity table, or any label with an explicit `met`.
pub fn parse_activity(
    text: &str,
    opts: &CsvOptions,
    ctx: &FileCtx,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<ActivityEntry>> {
    let table = read_table(text, &ACTIVITY, opts, ctx, diags)?;
    let has_met_column = table.column("met").is_some();
    let rows = parse_rows(&table, ctx, opts, diags, |c, d| {
        let activity = c.required_text("activity", d)?;
        let minutes = c.number("minutes", d)?;
        if !(0.0..=MAX_ACTIVITY_MINUTES).contains(&minutes) {
            d.push(
                c.warn("minutes", "implausible minutes; the row is dropped")
                    .expected(format!("0 to {MAX_ACTIVITY_MINUTES} minutes"))
                    .found(format!("`{minutes}`"))
                    .hint("one row is one activity on one day; check for a typing error or hours written as minutes"),
            );
            return None;
        }
        let given = c.optional_number("met", "the row is dropped", d).ok()?;
        let (met, met_source) = match given {
            Some(m) => {
                if !(MET_RANGE.0..=MET_RANGE.1).contains(&m) {
                    d.push(
                        c.warn("met", "MET value out of range; the row is dropped")
                            .expected(format!(
                                "a MET value from {} to {}",
                                MET_RANGE.0, MET_RANGE.1
                            ))
                            .found(format!("`{m}`")),
                    );
                    return None;
                }
                (m, "given in file".to_string())
            }
            None => match activities::lookup(&activity) {
                Some(def) => (def.met, def.met_source()),
                None => {
                    let known = activities::common_codes().join(", ");
                    let how = if has_met_column {
                        "or fill in its `met` value"
                    } else {
                        "or add a `met` column with its MET value"
                    };
                    d.push(
                        c.warn(
                            "activity",
                            "unknown activity code and no MET value; the row is dropped",
                        )
                        .expected("a code from the activity table, or any label with a `met` value")
                        .found(format!("`{activity}`"))
                        .hint(format!("known codes include {known}; use one {how}")),
                    );
                    return None;
                }
            },
        };
        let steps = match c.optional_number("steps", "the steps are ignored", d) {
            // Common practice: more than 100,000 steps in one row is not a real count.
            Ok(Some(s)) if !(0.0..=100_000.0).contains(&s) => {
                d.push(
                    c.warn("steps", "implausible step count; the steps are ignored")
                        .expected("0 to 100000 steps")
                        .found(format!("`{s}`")),
                );
                None
            }
            Ok(s) => s,
            Err(Dropped) => None,
        };
        Some((activity, minutes, met, met_source, steps))
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, &table, ctx, diags);

    let mut per_day: BTreeMap<NaiveDate, f64> = BTreeMap::new();
    for r in &rows {
        *per_day.entry(r.date).or_default() += r.value.1;
    }
    let mcol = table.column("minutes");
    let mut warned = std::collections::BTreeSet::new();
    let mut out = Vec::new();
    for r in rows {
        let total = per_day[&r.date];
        if total > MAX_ACTIVITY_MINUTES {
            if warned.insert(r.date) {
                diags.push(
                    ctx.warning(format!(
                        "{total} activity minutes on {}; the day's activity rows are dropped",
                        r.date
                    ))
                    .at(r.line, mcol)
                    .field("minutes")
                    .expected(format!("at most {MAX_ACTIVITY_MINUTES} minutes in one day"))
                    .found(format!("{total} minutes"))
                    .hint("check for repeated rows or hours written as minutes"),
                );
            }
            continue;
        }
        let (activity, minutes, met, met_source, steps) = r.value;
        out.push(ActivityEntry {
            date: r.date,
            activity,
            minutes,
            met,
            met_source,
            steps,
        });
    }
    out.sort_by_key(|a| a.date);
    Some(out)
}

/// Parses `sessions.csv`.
pub fn parse_sessions(
    text: &str,
    opts: &CsvOptions,
    ctx: &FileCtx,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<SessionRecord>> {
    let table = read_table(text, &SESSIONS, opts, ctx, diags)?;
    let rows = parse_rows(&table, ctx, opts, diags, |c, d| {
        let session = c.required_text("session", d)?;
        let a = c.required_text("attended", d)?;
        let attended = match a.to_lowercase().as_str() {
            "yes" | "y" | "true" | "1" => true,
            "no" | "n" | "false" | "0" => false,
            _ => {
                d.push(
                    c.warn("attended", "unreadable attendance; the row is dropped")
                        .expected("`yes` or `no`")
                        .found(format!("`{a}`")),
                );
                return None;
            }
        };
        Some((session, attended))
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, &table, ctx, diags);
    let mut out: Vec<SessionRecord> = rows
        .into_iter()
        .map(|r| SessionRecord {
            date: r.date,
            session: r.value.0,
            attended: r.value.1,
        })
        .collect();
    out.sort_by_key(|s| s.date);
    Some(out)
}

/// Units accepted per lab test, with the conversion to the canonical unit.
fn lab_unit(test: LabTest, unit: &str) -> Option<fn(f64) -> f64> {
    let u = unit.to_lowercase().replace(' ', "");
    Some(match (test, u.as_str()) {
        (LabTest::FastingGlucose, "mmol/l") => |v| v,
        (LabTest::FastingGlucose, "mg/dl") => glucose_mgdl_to_mmoll,
        (LabTest::Hba1c, "%") => |v| v,
        (LabTest::Hba1c, "mmol/mol") => hba1c_mmolmol_to_percent,
        (LabTest::Waist, "cm") => |v| v,
        (LabTest::Waist, "in" | "inch" | "inches") => |v| v * CM_PER_IN,
        (LabTest::SystolicBp | LabTest::DiastolicBp, "mmhg") => |v| v,
        _ => return None,
    })
}

fn lab_units_text(test: LabTest) -> &'static str {
    match test {
        LabTest::FastingGlucose => "`mmol/L` or `mg/dL`",
        LabTest::Hba1c => "`%` or `mmol/mol`",
        LabTest::Waist => "`cm` or `in`",
        LabTest::SystolicBp | LabTest::DiastolicBp => "`mmHg`",
    }
}

/// Plausible values in the canonical unit (common practice: outside these a value is a typing
/// or unit error).
fn lab_range(test: LabTest) -> (f64, f64) {
    match test {
        LabTest::FastingGlucose => (1.0, 40.0),
        LabTest::Hba1c => (3.0, 20.0),
        LabTest::Waist => (40.0, 250.0),
        LabTest::SystolicBp => (60.0, 280.0),
        LabTest::DiastolicBp => (30.0, 180.0),
    }
}

/// Parses `labs.csv`, converting each value to its test's canonical unit.
pub fn parse_labs(
    text: &str,
    opts: &CsvOptions,
    ctx: &FileCtx,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<LabResult>> {
    let table = read_table(text, &LABS, opts, ctx, diags)?;
    let rows = parse_rows(&table, ctx, opts, diags, |c, d| {
        let name = c.required_text("test", d)?;
        let test = match name.to_lowercase().as_str() {
            "fasting_glucose" => LabTest::FastingGlucose,
            "hba1c" => LabTest::Hba1c,
            "waist" => LabTest::Waist,
            "systolic_bp" => LabTest::SystolicBp,
            "diastolic_bp" => LabTest::DiastolicBp,
            _ => {
                d.push(
                    c.warn("test", "unknown test; the row is dropped")
                        .expected("one of fasting_glucose, hba1c, waist, systolic_bp, diastolic_bp")
                        .found(format!("`{name}`")),
                );
                return None;
            }
        };
        let value = c.number("value", d)?;
        let unit = c.required_text("unit", d)?;
        let Some(convert) = lab_unit(test, &unit) else {
            d.push(
                c.warn(
                    "unit",
                    format!("unit not accepted for `{name}`; the row is dropped"),
                )
                .expected(lab_units_text(test))
                .found(format!("`{unit}`")),
            );
            return None;
        };
        let canonical = convert(value);
        let (lo, hi) = lab_range(test);
        if !(lo..=hi).contains(&canonical) {
            d.push(
                c.warn(
                    "value",
                    format!("implausible `{name}` value; the row is dropped"),
                )
                .expected(format!("{lo} to {hi} {}", test.canonical_unit()))
                .found(format!("`{value}` {unit}"))
                .hint("check for a typing error or a wrong unit"),
            );
            return None;
        }
        Some(LabResult {
            date: NaiveDate::MIN,
            test,
            value: canonical,
            unit_as_written: unit,
            value_as_written: value,
        })
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, &table, ctx, diags);
    let mut out: Vec<LabResult> = rows
        .into_iter()
        .map(|r| LabResult {
            date: r.date,
            ..r.value
        })
        .collect();
    out.sort_by_key(|l| (l.date, l.test));
    Some(out)
}

#[cfg(test)]
mod tests;

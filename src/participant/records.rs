//! The five CSV files of a participant folder: parsing each row, then the checks that need the
//! whole file (duplicates, dates outside the participant's time in the program, a weigh-in in the
//! wrong unit, daily totals). Parsers take the file's text, so they are tested on strings.
//!
//! Policy: a bad value drops its row (or only the value, for optional columns) with a warning; a
//! file whose shape cannot be trusted (missing column) is an error. Every list comes out sorted
//! by date.

use super::quantity::{
    MassUnit, WrittenDuration, WrittenMass, number_prefix_len, split_duration, split_mass,
};
use super::table::{
    Cells, CsvOptions, Dropped, FileCtx, LocalZone, SUMMARY_LABELS, Table, When, header_key,
    is_label, numeric_date_after, read_table,
};
use crate::activities;
use crate::diag::{Diagnostic, Severity};
pub use crate::program::files::{ACTIVITY, ALL_FILES, INTAKE, LABS, MET_RANGE, SESSIONS, WEIGHTS};
use chrono::{Datelike, NaiveDate, NaiveTime};
use cohortpress_metric_api::units::{
    CM_PER_IN, KG_PER_LB, Mass, glucose_mgdl_to_mmoll, hba1c_mmolmol_to_percent,
};
use cohortpress_metric_api::{
    ActivityEntry, Censor, IntakeDay, LabResult, LabTest, SessionRecord, WeighIn,
};
use std::collections::{BTreeMap, HashMap};
use std::fmt::Debug;

/// Plausible body weight, kg (common practice: outside this range a value is a typing or unit
/// error, not a person in a lifestyle program).
pub const WEIGHT_KG_RANGE: (f64, f64) = (25.0, 350.0);
/// An `Energy` column without a unit whose daily totals have a median above this many is read
/// as kilojoules (refused until the header says which): adults' logged intake is rarely above
/// 4,500 kcal a day, while 4,500 kJ is about 1,075 kcal (common practice).
pub const KJ_LIKE_MEDIAN_KCAL: f64 = 4_500.0;
/// A `kcal` column (named so, or `Energy (kcal)`) whose daily totals have a median above this
/// many is refused as kilojoules under a kcal header: no adult in a weight-management program
/// logs over 6,000 kcal a day for weeks, while 6,000 kJ is about 1,430 kcal, below what most
/// adults eat (common practice).
pub const KJ_LIKE_MEDIAN_NAMED_KCAL: f64 = 6_000.0;
/// Kilojoules in a kilocalorie: 4.184 (thermochemical calorie, exact by definition).
pub const KJ_PER_KCAL: f64 = 4.184;
/// Plausible logged intake per day, kcal: above 0 and at most this (common practice).
pub const MAX_KCAL_PER_DAY: f64 = 10_000.0;
/// Energy per gram of the intake macros, kcal/g, in the order of [`MACROS`] (carbohydrate,
/// fat, protein, free sugars): Atwater general factors, 4 kcal/g for protein and carbohydrate
/// (free sugars are carbohydrate), 9 kcal/g for fat (7 kcal/g for alcohol, which intake.csv
/// has no column for). FAO 2003, "Food energy – methods of analysis and conversion factors",
/// FAO Food and Nutrition Paper 77, §3.
pub const ATWATER_KCAL_PER_G: [f64; 4] = [4.0, 9.0, 4.0, 4.0];
/// A row's carbohydrate, fat and protein whose energy (by [`ATWATER_KCAL_PER_G`]) is above
/// this many times the row's kcal, plus [`MACRO_ENERGY_MARGIN_KCAL`], disagree with it: one of
/// them is mistyped (common practice: twice covers fibre and sugar alcohols counted in a
/// label's carbohydrate at 4 kcal/g and the general factors' error).
pub const MACRO_ENERGY_MAX_RATIO: f64 = 2.0;
/// Allowance for rounding on small rows (labels round energy to 5–10 kcal and grams to 1 g:
/// a 5 kcal row may list 1 g each of carbohydrate, fat and protein, 17 kcal; common practice).
pub const MACRO_ENERGY_MARGIN_KCAL: f64 = 100.0;
/// Most minutes one activity row, or one day's rows together, can hold: 16 waking hours
/// (common practice).
pub const MAX_ACTIVITY_MINUTES: f64 = 960.0;
/// Pounds per kilogram (1 / 0.45359237, exact factor of 1959).
pub const LB_PER_KG: f64 = 1.0 / KG_PER_LB;
/// A weigh-in within ±6 % of 2.2046 times its neighbours is read as written in the other unit
/// (common practice: day-to-day weight varies by far less than 6 %).
pub const UNIT_SWAP_TOLERANCE: f64 = 0.06;
/// Neighbours of a weigh-in for the unit check: other weigh-ins within this many days
/// (common practice).
pub const UNIT_SWAP_WINDOW_DAYS: i64 = 14;
/// Earlier weigh-ins a weigh-in is also compared with, in date order, for stretches written in
/// the other unit (program choice: five is a working week of daily weigh-ins).
pub const UNIT_SWAP_PREVIOUS: usize = 5;

/// Two weigh-ins at most [`PEOPLE_MIX_MAX_DAYS`] apart that differ by more than this share of
/// the lower one are not one person's (common practice: body weight varies by 1–3 % within a
/// day, from water and food; 10 % leaves room for a stomach bug and a scale in the wrong unit
/// of its own).
pub const PEOPLE_MIX_JUMP: f64 = 0.10;
/// Days apart (calendar days) within which [`PEOPLE_MIX_JUMP`] applies.
pub const PEOPLE_MIX_MAX_DAYS: i64 = 1;
/// A weights file is taken for more than one person's when at least this many neighbouring
/// weigh-ins jump by [`PEOPLE_MIX_JUMP`] …
pub const PEOPLE_MIX_MIN_JUMPS: usize = 3;
/// … and the jumps are at least this share of the neighbouring pairs (one typing error gives
/// two jumps, in and out, and is left to the trend's outlier screen).
pub const PEOPLE_MIX_MIN_SHARE: f64 = 0.10;

/// The days a participant's data may fall on.
#[derive(Debug, Clone, Copy)]
pub struct Window {
    /// Enrolment date (data before it are dropped), when known.
    pub enrolled: Option<NaiveDate>,
    /// Withdrawal date (data after it are dropped), when any.
    pub withdrew: Option<NaiveDate>,
    /// Weigh-ins dated after `withdrew` are kept as follow-up (`withdrawal_reason:
    /// stopped_program`): only the weights file reads them; every other file still drops its
    /// rows after the withdrawal (they are program activity).
    pub follow_up_weigh_ins: bool,
    /// The run's "today": later data are future data and dropped.
    pub as_of: NaiveDate,
    /// The first day of the period a run reports; `None` for `check`. Rows dated after a
    /// withdrawal on an earlier day are left out without a warning: the run of the month the
    /// person left said so (see [`in_window`]).
    pub reported_from: Option<NaiveDate>,
    /// The profile's height, cm, when known: weigh-ins that give no adult's BMI in the unit
    /// they declare, but do in the other, are in the other unit.
    pub height_cm: Option<f64>,
    /// The profile's `high-bmi-checked` flag: weigh-ins with a BMI of
    /// [`HIGH_BMI`] or more are this person's, in the unit written.
    pub high_bmi_checked: bool,
    /// The profile's `low-bmi-checked` flag: weigh-ins in pounds with a BMI under
    /// [`UNDERWEIGHT_BMI`] are this person's, in the unit written.
    pub low_bmi_checked: bool,
}

/// A BMI, kg/m², at and above which weigh-ins read as kilograms are taken for pounds unless the
/// profile says they were checked (`high-bmi-checked`): pounds written as kilograms are 2.2
/// times the weight, so anyone over a BMI of 27 in pounds is over 60 as kilograms, and BMI 60
/// and over is rare enough to be a category of its own in bariatric surgery ("super-super
/// obesity"; from memory).
pub const HIGH_BMI: f64 = 60.0;

/// A BMI, kg/m², under which a whole weights file in pounds that would give a likely BMI as
/// kilograms is taken for kilograms under `lb` unless the profile says it was checked
/// (`low-bmi-checked`): kilograms written as pounds read as 0.45 times the weight, so anyone
/// with a BMI under 40.8 reads as underweight. Under 18.5 is underweight (WHO 2000, *Obesity:
/// preventing and managing the global epidemic*, Technical Report Series 894), rare among
/// adults who join a weight-management program.
pub const UNDERWEIGHT_BMI: f64 = 18.5;

/// A BMI, kg/m², below which weigh-ins are no adult's in a weight-management program (WHO:
/// under 16 is severe thinness).
pub const LOW_BMI: f64 = 16.0;

impl Window {
    /// The BMI of `kg` at the profile's height.
    fn bmi(&self, kg: f64) -> Option<f64> {
        self.height_cm.map(|h| kg / (h / 100.0).powi(2))
    }

    /// Whether `kg` is a likely weight for this person: a BMI from [`LOW_BMI`] to under
    /// [`HIGH_BMI`] (any, above `LOW_BMI`, when the profile says a high BMI was checked);
    /// `None` without a height.
    fn likely_kg(&self, kg: f64) -> Option<bool> {
        let high = if self.high_bmi_checked {
            f64::INFINITY
        } else {
            HIGH_BMI
        };
        self.bmi(kg).map(|b| (LOW_BMI..high).contains(&b))
    }
}

/// A parsed row before the whole-file checks.
#[derive(Debug, Clone)]
struct Parsed<T> {
    line: u64,
    date: NaiveDate,
    /// Time of day written with the date (a date-time), if any.
    time: Option<NaiveTime>,
    value: T,
}

/// Reads the rows of `table` through `f`, skipping rows `f` refuses and rows that repeat
/// earlier rows on strong evidence ([`Table::repeated_rows`]).
///
/// Rows dated after a withdrawal of consent (`w`) are not read at all: their values are neither
/// checked nor warned about, nor counted in the file's rows, and the file gets the one warning
/// of [`after_withdrawn_consent`] (when the run's period calls for it, see [`in_window`]). A
/// scale that kept syncing into such a folder wrote a row whose weight did not read, and every
/// later month's run ended with exit code 1 on "not a number in `weight`", the value quoted.
///
/// When rows were dropped with a warning and none was kept, the file gives nothing: that is
/// an error on the file (exit code 4, "a file was left out"), not a column of warnings a
/// scheduled run's log reports as a clean run with warnings. A whole export in a form no row
/// of which reads (a timestamp column in epoch milliseconds, say) was reported as warnings
/// only, and the participant's report had no weigh-ins.
fn parse_rows<T>(
    table: &Table,
    ctx: &FileCtx,
    opts: &CsvOptions,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
    mut f: impl FnMut(&Cells<'_>, &mut Vec<Diagnostic>) -> Option<T>,
) -> Vec<Parsed<T>> {
    let mut repeats = table.repeated_rows();
    let consent_withdrawn = w.withdrew.filter(|_| !w.follow_up_weigh_ins);
    // Lines of the rows dated after the withdrawal of consent, not read.
    let mut after_consent: Vec<u64> = Vec::new();
    let mut out = Vec::new();
    // Rows dropped with a warning: their number and the first one's warning.
    let mut dropped = 0usize;
    let mut first_dropped: Option<Diagnostic> = None;
    for (row, repeat) in table.rows.iter().zip(&repeats) {
        if repeat.is_some() {
            continue;
        }
        let cells = Cells {
            table,
            row,
            ctx,
            opts,
        };
        let before = diags.len();
        let when = cells.when("date", diags);
        // A numeric date no order was found for (a withdrawal near the start left no row
        // before it that tells, in a file of ISO dates too) that lies after the withdrawal in
        // every reading: not read, not warned about as unreadable (which quoted it).
        let after = |x: NaiveDate| match when {
            Some(wn) => wn.date > x,
            None => table
                .get(row, "date")
                .is_some_and(|s| numeric_date_after(s, opts, x)),
        };
        if consent_withdrawn.is_some_and(after) {
            diags.truncate(before);
            ctx.uncount_row();
            after_consent.push(row.line);
            continue;
        }
        let kept = when.and_then(|when| {
            if table.is_unfilled(row) {
                table.unfilled_row(row);
                return None;
            }
            f(&cells, diags).map(|value| Parsed {
                line: row.line,
                date: when.date,
                time: when.time,
                value,
            })
        });
        match kept {
            Some(p) => out.push(p),
            None => {
                if let Some(d) = diags[before..]
                    .iter()
                    .find(|d| d.severity == Severity::Warning)
                {
                    dropped += 1;
                    first_dropped.get_or_insert_with(|| d.clone());
                }
            }
        }
    }
    // A repeat of a row after the withdrawal is one too (identical, date included).
    for (row, repeat) in table.rows.iter().zip(repeats.iter_mut()) {
        if repeat.is_some_and(|orig| after_consent.contains(&orig)) {
            *repeat = None;
            ctx.uncount_row();
            after_consent.push(row.line);
        }
    }
    report_repeats(table, &repeats, ctx, diags);
    if let (Some(x), Some(&first)) = (consent_withdrawn, after_consent.iter().min())
        && w.reported_from.is_none_or(|from| x >= from)
    {
        diags.push(after_withdrawn_consent(x, first, table.column("date"), ctx));
    }
    // Rows the table reader dropped for their shape count too: a comma-separated file whose
    // weights have decimal commas (`2026-04-10,71,1,kg`) lost every row as "a field too many",
    // and the run ended "with warnings" (exit code 1) without a weigh-in.
    let (shape_dropped, first_shape) = &table.dropped;
    dropped += shape_dropped;
    let first_dropped = match (first_dropped, first_shape) {
        (Some(a), Some(b)) if b.line < a.line => Some(b.clone()),
        (None, b) => b.clone(),
        (a, _) => a,
    };
    if out.is_empty()
        && let Some(first) = first_dropped
    {
        let rows = if dropped == 1 { "row" } else { "rows" };
        let mut e = ctx
            .error(format!(
                "no row of the file could be read: {} {rows} dropped, each named in a \
                 warning; the file is not used",
                crate::diag::thousands(dropped)
            ))
            .expected("rows whose values can be read")
            .found(match &first.found {
                Some(found) => format!("{} ({found})", first.message),
                None => first.message.clone(),
            })
            .hint(
                "the first warning names what each row needs; export the file again in a form \
                 it lists, or map its columns in program.yaml's `input:`",
            );
        if let Some(line) = first.line {
            e = e.at(line, first.column);
        }
        diags.push(e);
    }
    out
}

/// One warning per run of repeated rows: a single row identical to an earlier one in every
/// column (time included), or a block of rows repeating an earlier block.
fn report_repeats(
    table: &Table,
    repeats: &[Option<u64>],
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) {
    let mut k = 0;
    while k < repeats.len() {
        let Some(orig) = repeats[k] else {
            k += 1;
            continue;
        };
        let mut end = k;
        while end + 1 < repeats.len() && repeats[end + 1].is_some() {
            end += 1;
        }
        let (first, last) = (table.rows[k].line, table.rows[end].line);
        // Located at the row's first column, with the row as found: a duplicate was named by
        // its line alone, with neither what was expected nor what was found.
        let found = format!("`{}`", table.row_text(&table.rows[k]));
        let d = if end == k {
            ctx.warning(format!(
                "identical to line {orig} in every column, time included; the row is dropped as a duplicate"
            ))
            .at(first, Some(1))
            .expected(format!(
                "each measurement once: a row that differs from line {orig} in some column"
            ))
            .found(format!("{found}, as on line {orig}"))
            .hint("remove repeated rows (a file exported twice and pasted together?)")
        } else {
            let orig_last = repeats[end].expect("in the run");
            ctx.warning(format!(
                "lines {first}–{last} ({} rows) repeat lines {orig}–{orig_last} row for row; they are dropped as duplicates",
                end - k + 1
            ))
            .at(first, Some(1))
            .expected(format!(
                "each measurement once: rows that differ from lines {orig}–{orig_last}"
            ))
            .found(format!(
                "{found} and the {} below it, as on lines {orig}–{orig_last}",
                if end - k == 1 {
                    "row".to_string()
                } else {
                    format!("{} rows", end - k)
                }
            ))
            .hint("remove the repeated block (a file exported twice and pasted together?)")
        };
        diags.push(d);
        k = end + 1;
    }
}

/// Notes identical rows on one day that are all counted (two snacks of the same size are
/// common): the day's total includes each, and the note says so, once per file. `what` names
/// the rows, `counted` says how each is counted (`are each counted in the day's total`).
fn note_identical_same_day<T: SameValue>(
    rows: &[Parsed<T>],
    what: &str,
    counted: &str,
    ctx: &FileCtx,
) {
    let mut order: Vec<usize> = (0..rows.len()).collect();
    order.sort_by_key(|&i| rows[i].date);
    let mut found = Vec::new();
    for group in order.chunk_by(|&a, &b| rows[a].date == rows[b].date) {
        if group.len() < 2 || group.len() > PAIRWISE_MAX {
            continue;
        }
        let mut lines = Vec::new();
        for (k, &i) in group.iter().enumerate() {
            if group[..k]
                .iter()
                .chain(&group[k + 1..])
                .any(|&j| rows[j].time == rows[i].time && rows[j].value.same_value(&rows[i].value))
            {
                lines.push(rows[i].line.to_string());
            }
        }
        if !lines.is_empty() {
            found.push(format!(
                "{} (lines {})",
                rows[group[0]].date,
                lines.join(", ")
            ));
        }
    }
    if !found.is_empty() {
        let n = found.len();
        let shown = found.iter().take(5).cloned().collect::<Vec<_>>().join("; ");
        let more = if n > 5 {
            format!(" and {} more", n - 5)
        } else {
            String::new()
        };
        ctx.note(format!(
            "identical {what} on the same day {counted}: {shown}{more}; delete one only if it was entered twice"
        ));
    }
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

/// Drops rows dated after `as_of`, before enrolment or after withdrawal (after withdrawal only
/// when `drop_after_withdrawal`; the weights file of someone who stopped the program keeps its
/// later weigh-ins as follow-up).
///
/// One such row is named on its own; several of one kind are named in one warning at the
/// first of them, with their number and dates. A re-issue of an earlier month (an early
/// `--as-of`) leaves every later row out by design, and an enrolment date typed a month late
/// leaves out a month of rows: one note per file and kind says so, where a note per row filled
/// the participant's report (69 notes for one participant's re-issued month).
///
/// Rows after a withdrawal are not counted in the file's rows either (`*_rows_in_file`), and
/// are warned about only by `check` and by a run whose period does not begin after the
/// withdrawal (the month the person left): a scale that kept syncing into the folder of
/// someone who had withdrawn ended every later monthly run "with warnings" (exit code 1) for
/// something already known. After withdrawn consent the warning gives neither the number nor
/// the dates of those rows (nothing of them is shown), and says what to do.
fn in_window<T>(
    rows: Vec<Parsed<T>>,
    w: &Window,
    drop_after_withdrawal: bool,
    table: &Table,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Vec<Parsed<T>> {
    #[derive(Clone, Copy, PartialEq)]
    enum Out {
        Future,
        BeforeEnrolment(NaiveDate),
        AfterWithdrawal(NaiveDate),
    }
    let col = table.column("date");
    let why = |d: NaiveDate| {
        if d > w.as_of {
            Some(Out::Future)
        } else if let Some(e) = w.enrolled.filter(|e| d < *e) {
            Some(Out::BeforeEnrolment(e))
        } else {
            w.withdrew
                .filter(|x| drop_after_withdrawal && d > *x)
                .map(Out::AfterWithdrawal)
        }
    };
    // (kind, first line, earliest and latest date, count), in the order first met.
    let mut left: Vec<(Out, u64, NaiveDate, NaiveDate, usize)> = Vec::new();
    let kept: Vec<Parsed<T>> = rows
        .into_iter()
        .filter(|r| match why(r.date) {
            Some(k) => {
                if matches!(k, Out::AfterWithdrawal(_)) {
                    ctx.uncount_row();
                }
                match left.iter_mut().find(|x| x.0 == k) {
                    Some(x) => {
                        x.2 = x.2.min(r.date);
                        x.3 = x.3.max(r.date);
                        x.4 += 1;
                    }
                    None => left.push((k, r.line, r.date, r.date, 1)),
                }
                false
            }
            None => true,
        })
        .collect();
    for (kind, line, lo, hi, n) in left {
        if let Out::AfterWithdrawal(x) = kind {
            // Said by the run of the month they left (or an earlier one) and by `check`.
            if w.reported_from.is_some_and(|from| x < from) {
                continue;
            }
            if !w.follow_up_weigh_ins {
                diags.push(after_withdrawn_consent(x, line, col, ctx));
                continue;
            }
        }
        let dates = if lo == hi {
            lo.to_string()
        } else {
            format!("{lo} to {hi}")
        };
        // A date the profile sets (`key`): rows `what` it.
        let profile_bound = |what: &str, on: NaiveDate, side: &str, key: &str| {
            (
                format!("date {lo} is {what} ({on}); the row is dropped"),
                format!(
                    "{n} rows are dated {what} ({on}; {dates}, the first at this line); they \
                     are not counted"
                ),
                format!("a date {side} {on}"),
                format!("check the date, or the `{key}` date in profile.yaml"),
            )
        };
        let (one, many, expected, hint) = match kind {
            Out::Future => (
                format!(
                    "date {lo} is in the future (after the as-of date {}); the row is dropped",
                    w.as_of
                ),
                format!(
                    "{n} rows are dated after the as-of date {} ({dates}, the first at this \
                     line); they are not counted",
                    w.as_of
                ),
                format!("a date on or before {}", w.as_of),
                "check the year; run with a later `--as-of` if the data are real (a re-issue \
                 of an earlier month leaves later rows out by design)"
                    .to_string(),
            ),
            Out::BeforeEnrolment(e) => {
                profile_bound("before enrolment", e, "on or after", "enrolled")
            }
            Out::AfterWithdrawal(x) => {
                profile_bound("after withdrawal", x, "on or before", "withdrew")
            }
        };
        diags.push(
            ctx.warning(if n == 1 { one } else { many })
                .at(line, col)
                .field("date")
                .expected(expected)
                .found(dates)
                .hint(hint),
        );
    }
    kept
}

/// The end of the `expected` of [`after_withdrawn_consent`], by which the participant's report
/// recognises it ([`is_after_withdrawn_consent`]).
const CONSENT_WITHDRAWN: &str = "the participant withdrew consent to the use of their data";

/// The warning about a file of someone who withdrew consent on `withdrew` that holds rows dated
/// after it (the first at `line`): for the program staff, what to do. It gives neither their
/// number nor their dates, which are the person's data after consent was withdrawn.
fn after_withdrawn_consent(
    withdrew: NaiveDate,
    line: u64,
    col: Option<u64>,
    ctx: &FileCtx,
) -> Diagnostic {
    // Short enough for the run log's summary of warnings, which cuts messages at 120
    // characters.
    ctx.warning(format!(
        "rows dated after consent was withdrawn ({withdrew}) are not read: stop what adds them, \
         remove them"
    ))
    .at(line, col)
    .field("date")
    .expected(format!(
        "no rows dated after {withdrew}: {CONSENT_WITHDRAWN}"
    ))
    .found(format!("rows dated after {withdrew}"))
    .hint(format!(
        "the first is at this line; they are not shown or counted anywhere. Stop whatever still \
         adds this participant's records to their folder (a scale or app that syncs into it) and \
         remove the rows dated after {withdrew}; runs for later months leave them out without a \
         warning, and `cohortpress check` lists them until they are gone"
    ))
}

/// Whether `d` is the warning of [`after_withdrawn_consent`] (for the staff: the participant's
/// own report leaves it out).
pub fn is_after_withdrawn_consent(d: &Diagnostic) -> bool {
    d.expected
        .as_deref()
        .is_some_and(|e| e.ends_with(CONSENT_WITHDRAWN))
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum WeightUnit {
    Kg,
    Lb,
    /// The imperial stone of 14 lb (decimal stones, as British scales export them).
    St,
    /// Stones and pounds (`14 st 2 lb`), the value held in pounds.
    StLb,
    /// Grams, as the file states it (never guessed from the numbers).
    G,
}

impl From<MassUnit> for WeightUnit {
    fn from(u: MassUnit) -> Self {
        match u {
            MassUnit::Kg => WeightUnit::Kg,
            MassUnit::Lb => WeightUnit::Lb,
            MassUnit::St => WeightUnit::St,
            MassUnit::G => WeightUnit::G,
        }
    }
}

impl WeightUnit {
    /// The unit as a file declares it: stones and pounds are stones.
    fn mass_unit(self) -> MassUnit {
        match self {
            WeightUnit::Kg => MassUnit::Kg,
            WeightUnit::Lb => MassUnit::Lb,
            WeightUnit::St | WeightUnit::StLb => MassUnit::St,
            WeightUnit::G => MassUnit::G,
        }
    }

    /// `value` in this unit as written: `72.5 kg`, `14 st 2 lb`.
    fn show(self, value: f64) -> String {
        match self {
            WeightUnit::StLb => {
                let st = (value / LB_PER_STONE).floor();
                format!("{st} st {} lb", value - st * LB_PER_STONE)
            }
            u => format!("{value} {}", u.mass_unit().symbol()),
        }
    }
}

#[derive(Debug, Clone)]
struct RawWeight {
    time: Option<String>,
    value: f64,
    unit: WeightUnit,
    source: Option<String>,
    /// How a decimal stone value is written (`Plain` for other units).
    stone: StoneDecimals,
}

/// How a weight in decimal stones is written, from its digits: people and some apps write
/// stones and pounds as `14.12` (14 st 12 lb = 208 lb), which as decimal stones is 14.12 st =
/// 197.68 lb, 4.7 kg less. The two readings differ whenever the two decimals are 01 to 13.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum StoneDecimals {
    /// Not two decimals that could be pounds: `14`, `14.5`, `14.00` (the same either way), or
    /// another unit.
    Plain,
    /// Two decimals 01–13 (`14.12`, `14.05`): these pounds, or hundredths of a stone.
    LikeStonesPounds(u8),
    /// Decimals that cannot be pounds (`14.50`, `14.125`), and how many: the file writes
    /// decimal stones.
    Decimal(usize),
}

impl StoneDecimals {
    /// Classifies the number as written in the cell (`14.12`, `14,12` with a decimal comma).
    fn of(number: &str) -> StoneDecimals {
        let n = number.trim();
        let Some(at) = n.rfind(['.', ',']) else {
            return StoneDecimals::Plain;
        };
        let frac = &n[at + 1..];
        if !frac.bytes().all(|b| b.is_ascii_digit()) {
            return StoneDecimals::Plain;
        }
        match frac.len() {
            2 => match frac.parse::<u8>() {
                Ok(0) | Err(_) => StoneDecimals::Plain,
                Ok(lb) if f64::from(lb) < LB_PER_STONE => StoneDecimals::LikeStonesPounds(lb),
                Ok(_) => StoneDecimals::Decimal(2),
            },
            k @ 3.. => StoneDecimals::Decimal(k),
            _ => StoneDecimals::Plain,
        }
    }
}

/// Settles the stone values that could be stones and pounds ([`StoneDecimals`]). A file with
/// a value stones and pounds cannot write (`14.50`) writes decimal stones: all are read so,
/// with a note. Otherwise the file cannot say which it means, and a wrong guess moves a weight
/// by up to 4.7 kg: when at least half of its rows are written so, the file is not used (an
/// error at the first; `None`), else each such row is dropped with a warning. The messages
/// give both readings and how to write the weight so that it reads one way.
fn settle_stone_decimals(
    rows: Vec<Parsed<RawWeight>>,
    table: &Table,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<Parsed<RawWeight>>> {
    let like = |r: &Parsed<RawWeight>| match r.value.stone {
        StoneDecimals::LikeStonesPounds(lb) => Some(lb),
        _ => None,
    };
    let n_like = rows.iter().filter(|r| like(r).is_some()).count();
    if n_like == 0 {
        return Some(rows);
    }
    let col = table.column("weight");
    let decimal = rows.iter().find_map(|r| match r.value.stone {
        StoneDecimals::Decimal(k) => Some((r, k)),
        _ => None,
    });
    if let Some((d, k)) = decimal {
        table.recognised(format!(
            "two-decimal stones as decimal stones (`14.12` = 14.12 st), as `{:.k$}` at line {} cannot be stones and pounds",
            d.value.value, d.line
        ));
        return Some(rows);
    }
    // Both readings in words, and the weight as written.
    let readings = |r: &Parsed<RawWeight>, lb: u8| {
        let st = r.value.value.trunc();
        let as_st_lb = Mass::from_lb(st * LB_PER_STONE + f64::from(lb)).kg();
        let as_decimal = Mass::from_lb(r.value.value * LB_PER_STONE).kg();
        (
            format!(
                "`{st:.0}.{lb:02}` could be {st:.0} st {lb} lb ({as_st_lb:.1} kg) or {st:.0}.{lb:02} decimal stones ({as_decimal:.1} kg)"
            ),
            format!(
                "stones and pounds with both units (`{st:.0} st {lb} lb`), or the weight in kg or lb"
            ),
            format!("`{st:.0}.{lb:02}` in stones"),
        )
    };
    const HOW: &str = "write stones and pounds with both units (`14 st 12 lb`, `14st 12lb`); two decimals up to .13 cannot tell decimal stones from them, so write decimal stones in kg or lb";
    if n_like * 2 >= rows.len() {
        let first = rows.iter().find(|r| like(r).is_some()).expect("n_like > 0");
        let lb = like(first).expect("found above");
        let (both, expected, found) = readings(first, lb);
        diags.push(
            ctx.error(format!(
                "the stone weight {both}; {n_like} of the file's {} weights are written so and none shows which is meant, so the file is not used",
                rows.len()
            ))
            .at(first.line, col)
            .field("weight")
            .expected(expected)
            .found(found)
            .hint(HOW),
        );
        return None;
    }
    let mut kept = Vec::with_capacity(rows.len() - n_like);
    for r in rows {
        let Some(lb) = like(&r) else {
            kept.push(r);
            continue;
        };
        let (both, expected, found) = readings(&r, lb);
        diags.push(
            ctx.warning(format!(
                "the stone weight {both}, and the file's other weights do not show which; the row is dropped"
            ))
            .at(r.line, col)
            .field("weight")
            .expected(expected)
            .found(found)
            .hint(HOW),
        );
    }
    Some(kept)
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
            WeightUnit::St => Mass::from_lb(LB_PER_STONE * self.value).kg(),
            WeightUnit::StLb => Mass::from_lb(self.value).kg(),
            // 1 kg = 1000 g (SI).
            WeightUnit::G => self.value / 1000.0,
        }
    }
}

/// Pounds in a stone (exactly 14; Weights and Measures Act 1985, Schedule 1).
const LB_PER_STONE: f64 = 14.0;

/// The median of the sorted (`f64::total_cmp`) values `sorted` without one copy of `v` when
/// it is among them (as [`median`] of the rest gives it); `None` when nothing is left.
fn median_without(sorted: &[f64], v: f64) -> Option<f64> {
    let skip = sorted
        .binary_search_by(|x| x.total_cmp(&v))
        .ok()
        .filter(|_| plausible_kg(v));
    let n = sorted.len() - usize::from(skip.is_some());
    if n == 0 {
        return None;
    }
    let at = |r: usize| match skip {
        Some(s) if r >= s => sorted[r + 1],
        _ => sorted[r],
    };
    Some(if n % 2 == 1 {
        at(n / 2)
    } else {
        (at(n / 2 - 1) + at(n / 2)) / 2.0
    })
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

/// A value whose unit written in its cell disagrees with the unit its row declares (a `unit`
/// column or the column's header).
struct UnitConflict {
    line: u64,
    column: Option<u64>,
    /// The column, as diagnostics name it (`weight`, `kcal`, `minutes`).
    field: &'static str,
    /// What the value is, in words (`weight`, `energy`, `duration`).
    what: &'static str,
    raw: String,
    /// The unit written in the cell.
    written: String,
    /// Who declares the other unit, in words (`the \`unit\` column says \`lb\``).
    by: String,
    /// The declared unit.
    said: String,
}

/// Settles a file's [`UnitConflict`]s, `declared_rows` the rows that declare a unit. A cell and
/// its row's declared unit that disagree cannot say which is right. When at least half of the
/// rows that declare a unit disagree so, the declared unit is wrong throughout: the file is not
/// used (an error at the first; `false`). Fewer are slips in single rows, each dropped with a
/// warning at its cell (one `86.5 kg` typed among a hundred weigh-ins under `lb` had cost the
/// person all of them).
fn settle_unit_conflicts(
    conflicts: &[UnitConflict],
    declared_rows: usize,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> bool {
    if let Some(k) = conflicts.first()
        && conflicts.len() * 2 >= declared_rows
    {
        diags.push(
            ctx.error(format!(
                "the {} `{}` is written in {} but {}; {} of the {declared_rows} rows that declare a unit disagree so, and the file is not used, as it cannot say which unit its values are in",
                k.what,
                k.raw,
                k.written,
                k.by,
                conflicts.len()
            ))
            .at(k.line, k.column)
            .field(k.field)
            .expected(format!(
                "values in {} (the unit the file declares), with or without the unit in the cell",
                k.said
            ))
            .found(format!("`{}`", k.raw))
            .hint("correct the cells or the declared unit; a unit written in every cell needs none declared"),
        );
        return false;
    }
    for k in conflicts {
        diags.push(
            ctx.warning(format!(
                "the {} `{}` is written in {} but {}; the row is dropped, as it cannot say which unit it is in",
                k.what, k.raw, k.written, k.by
            ))
            .at(k.line, k.column)
            .field(k.field)
            .expected(format!(
                "a value in {} (the unit the row declares), with or without the unit in the cell",
                k.said
            ))
            .found(format!("`{}`", k.raw))
            .hint("correct the cell or the row's unit"),
        );
    }
    true
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
    // Weights whose unit in the cell disagrees with the unit column or header, and how many
    // rows declare a unit there: see after the rows.
    let mut conflicts: Vec<UnitConflict> = Vec::new();
    let mut declared_rows = 0usize;
    // Whether the file's note already quotes its first weight in stones and pounds.
    let mut stones_noted = false;
    let rows = parse_rows(&table, ctx, opts, w, diags, |c, d| {
        const DROP: &str = "the row is dropped";
        // A spreadsheet's `Average` (or `Max`…) row with a date, marked in a column of its own:
        // no weigh-in.
        if let Some(label) = c.table.row_label(c.row, &SUMMARY_LABELS) {
            c.summary_row(label);
            return None;
        }
        let raw = c.required_text("weight", d)?;
        // The weight, with the unit written in its cell (`72.5 kg`, `14 st 2 lb`) if any.
        let (value, in_cell) = match split_mass(&raw) {
            Some(WrittenMass::One(n, u)) => (
                c.parse_number("weight", n, DROP, d)?,
                u.map(WeightUnit::from),
            ),
            Some(WrittenMass::StonesPounds(st, lb)) => {
                let (st, lb) = (
                    c.parse_number("weight", st, DROP, d)?,
                    c.parse_number("weight", lb, DROP, d)?,
                );
                if st < 0.0 || st.fract() != 0.0 || !(0.0..LB_PER_STONE).contains(&lb) {
                    d.push(
                        c.warn("weight", "unreadable stones and pounds; the row is dropped")
                            .expected("whole stones and under 14 pounds, e.g. `14 st 2 lb`")
                            .found(format!("`{raw}`"))
                            .hint("write stones and pounds (`14 st 2 lb`) or decimal stones (`14.1 st`)"),
                    );
                    return None;
                }
                // Pounds in all: 14 st 2 lb is exactly 198 lb.
                (st * LB_PER_STONE + lb, Some(WeightUnit::StLb))
            }
            Some(WrittenMass::UnknownUnit(u)) => {
                d.push(
                    c.warn(
                        "weight",
                        "unknown weight unit in the cell; the row is dropped",
                    )
                    .expected("a weight with `kg`, `lb`, `st` or `g`, or a plain number")
                    .found(format!("`{raw}` (unit `{u}`)")),
                );
                return None;
            }
            None => (c.number("weight", d)?, None),
        };
        // The unit column, else a unit written in the weight column's header.
        let declared_text = c.text("unit").or(c.table.header_unit("weight"));
        let declared = match declared_text {
            None => None,
            Some(t) => match MassUnit::parse(t) {
                Some(u) => Some(u),
                None => {
                    let mut w = c
                        .warn("unit", "unknown weight unit; the row is dropped")
                        .expected("`kg`, `lb`, `st` (decimal stones) or `g`")
                        .found(format!("`{t}`"));
                    // A delimiter inside the text before the unit moved it one column on.
                    if let Some(h) = c.split_text_before("unit") {
                        w = w.hint(h);
                    }
                    d.push(w);
                    return None;
                }
            },
        };
        declared_rows += usize::from(declared.is_some());
        let unit = match (in_cell, declared) {
            (Some(cell), Some(said)) if cell.mass_unit() != said => {
                let by = if c.text("unit").is_some() {
                    format!("the `unit` column says `{}`", declared_text.unwrap_or(""))
                } else {
                    format!(
                        "the header `{}` says {}",
                        c.table.written_header("weight").unwrap_or("weight"),
                        said.symbol()
                    )
                };
                conflicts.push(UnitConflict {
                    line: c.row.line,
                    column: c.table.column("weight"),
                    field: "weight",
                    what: "weight",
                    raw: raw.to_string(),
                    written: cell.mass_unit().symbol().to_string(),
                    by,
                    said: said.symbol().to_string(),
                });
                return None;
            }
            (Some(WeightUnit::StLb), _) => {
                // The file's own first such weight and what it was read as: the guide's
                // `14 st 2 lb` = 198 lb was quoted for a file of `11 st 2 lb`.
                if !std::mem::replace(&mut stones_noted, true) {
                    c.table.recognised(format!(
                        "stones and pounds (`{}` = {} lb, the file's first)",
                        raw.trim(),
                        plain_number(value)
                    ));
                }
                WeightUnit::StLb
            }
            (Some(cell), _) => {
                c.table.recognised(match cell {
                    WeightUnit::G => {
                        "weights in grams in the cells (`72500 g`), converted to kilograms"
                    }
                    _ => "weights with their unit in the cell (`72.5 kg`)",
                });
                cell
            }
            (None, Some(said)) => {
                if said == MassUnit::G {
                    c.table
                        .recognised("weights in grams, converted to kilograms (1 kg = 1000 g)");
                }
                WeightUnit::from(said)
            }
            (None, None) => {
                if c.table.column("unit").is_some() {
                    // Pushes the "is empty" warning.
                    return c.required_text("unit", d).and(None);
                }
                d.push(
                    c.warn("weight", "the weight has no unit and the file has no `unit` column; the row is dropped")
                        .expected("a weight with its unit, e.g. `72.5 kg` or `160 lb`")
                        .found(format!("`{raw}`"))
                        .hint("write the unit with every weight, or add a `unit` column"),
                );
                return None;
            }
        };
        let time = c.text("time").and_then(|t| {
            // 24-hour or 12-hour (`7:12 AM`, as US-locale apps write it).
            match ["%H:%M", "%H:%M:%S", "%I:%M %p", "%I:%M:%S %p"]
                .iter()
                .find_map(|f| NaiveTime::parse_from_str(t, f).ok())
                .ok_or(())
            {
                Ok(tm) => Some(tm.format("%H:%M").to_string()),
                Err(_) => {
                    let mut w = c
                        .warn("time", "unreadable time; the time is ignored")
                        .expected("a time of day HH:MM, e.g. `07:30` (or `7:30 AM`)")
                        .found(format!("`{t}`"));
                    if let Some(h) = c.split_text_before("time") {
                        w = w.hint(h);
                    }
                    d.push(w);
                    None
                }
            }
        });
        Some(RawWeight {
            time,
            value,
            unit,
            source: c.text("source").map(str::to_string),
            stone: if unit == WeightUnit::St {
                StoneDecimals::of(match split_mass(&raw) {
                    Some(WrittenMass::One(n, _)) => n,
                    _ => &raw,
                })
            } else {
                StoneDecimals::Plain
            },
        })
    });
    if !settle_unit_conflicts(&conflicts, declared_rows, ctx, diags) {
        return None;
    }
    let rows = settle_stone_decimals(rows, &table, ctx, diags)?;
    let rows: Vec<Parsed<RawWeight>> = rows
        .into_iter()
        .map(|mut r| {
            if r.value.time.is_none() {
                r.value.time = r.time.map(|t| t.format("%H:%M").to_string());
            }
            r
        })
        .collect();
    // Identical rows with a time of day were dropped as duplicates; without one, two rows may
    // be two weigh-ins that read the same, and each is read (and the trend gives that day's
    // weight twice the say). The README promised `check` notes them, and nothing did for
    // weigh-ins: an export with a row pasted twice went unmentioned.
    note_identical_same_day(
        &rows,
        "weigh-ins without a time of day",
        "are each read as a weigh-in",
        ctx,
    );
    // Follow-up weigh-ins after a withdrawal are read only for someone who stopped the program.
    let rows = in_window(rows, w, !w.follow_up_weigh_ins, &table, ctx, diags);
    table.describe(opts, ctx);

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
    // `med` is the median the weigh-in is compared with (kg as written), `basis` says what it
    // is the median of: the corrected value and the warning, or `None`.
    let judge = |r: &Parsed<RawWeight>, written: f64, med: f64, basis: &str| {
        let ratio = written / med;
        let near = |target: f64| (ratio / target - 1.0).abs() <= UNIT_SWAP_TOLERANCE;
        let v = r.value.value;
        let (msg, corrected) = match r.value.unit {
            WeightUnit::Kg if near(LB_PER_KG) => (
                format!(
                    "weight {v} kg is about 2.2 times {basis} (median {med:.1} kg); it looks like pounds and is read as {v} lb = {:.1} kg",
                    Mass::from_lb(v).kg()
                ),
                Mass::from_lb(v).kg(),
            ),
            WeightUnit::Lb if near(1.0 / LB_PER_KG) => (
                format!(
                    "weight {v} lb is about 0.45 times {basis} (median {:.1} lb); it looks like kilograms and is read as {v} kg",
                    Mass::from_kg(med).lb()
                ),
                v,
            ),
            _ => return None,
        };
        let diag = ctx
            .warning(msg)
            .at(r.line, wcol)
            .field("weight")
            .found(format!(
                "`{v}` with unit `{}`",
                r.value.unit.mass_unit().symbol()
            ))
            .hint("check the `unit` column of this row and correct it");
        Some((corrected, diag))
    };
    let mut swapped = vec![false; rows.len()];
    let mut others: Vec<f64> = Vec::new();
    let around = format!("the other weigh-ins within {UNIT_SWAP_WINDOW_DAYS} days");
    // The weigh-ins of one day share their neighbours: the window's plausible values are sorted
    // once per day, and each weigh-in's median of the others is read off by rank, leaving out
    // one copy of its own value. Gathered and sorted per weigh-in, a file of 50,000 rows on
    // one day (a scale's raw log) took 22 s for that one participant.
    let mut by_row: Vec<(usize, f64, Diagnostic)> = Vec::new();
    let mut k = 0;
    while k < order.len() {
        let today = days[k];
        let same_day = days[k..].partition_point(|&d| d == today);
        let lo = days.partition_point(|&d| today - d > UNIT_SWAP_WINDOW_DAYS);
        let hi = days.partition_point(|&d| d - today <= UNIT_SWAP_WINDOW_DAYS);
        others.clear();
        others.extend(
            order[lo..hi]
                .iter()
                .map(|&j| written[j])
                .filter(|&v| plausible_kg(v)),
        );
        others.sort_unstable_by(f64::total_cmp);
        for &i in &order[k..k + same_day] {
            let Some(med) = median_without(&others, written[i]) else {
                continue;
            };
            if let Some((corrected, diag)) = judge(&rows[i], written[i], med, &around) {
                by_row.push((i, corrected, diag));
            }
        }
        k += same_day;
    }
    // In the order of the file, as before.
    by_row.sort_by_key(|x| x.0);
    for (i, corrected, diag) in by_row {
        kg[i] = corrected;
        swapped[i] = true;
        diags.push(diag);
    }
    // A stretch of weigh-ins in the other unit (an app or scale switched units for weeks): inside
    // it most neighbours share the wrong unit and the check above sees nothing. So each weigh-in
    // is also compared, in date order, with the median of the last [`UNIT_SWAP_PREVIOUS`]
    // weigh-ins before it within twice the window, as read (corrected ones included): the
    // first weigh-in of the stretch is compared with the right unit, and each later one with
    // corrected values. A stretch at the very start of a file has no earlier reference and is
    // left to the trend's step check, which names it.
    let mut by_previous: Vec<(usize, Diagnostic)> = Vec::new();
    let mut from_previous = vec![false; rows.len()];
    let mut recent: Vec<(i64, f64)> = Vec::new();
    // `recent` is in date order: the weigh-ins of earlier days are those before the first of
    // this day's (skipped one by one, 50,000 weigh-ins of one day took seconds).
    let mut before_today = 0;
    for &j in &order {
        let today = day(rows[j].date);
        if recent.get(before_today).is_some_and(|x| x.0 < today) {
            before_today = recent.partition_point(|x| x.0 < today);
        }
        if !swapped[j] {
            others.clear();
            others.extend(
                recent[..before_today]
                    .iter()
                    .rev()
                    .take_while(|(d, _)| today - d <= 2 * UNIT_SWAP_WINDOW_DAYS)
                    .take(UNIT_SWAP_PREVIOUS)
                    .map(|x| x.1),
            );
            if others.len() >= 3 {
                let n = others.len();
                // Both in kg: this row as its unit column says, the earlier ones as read.
                let med = median(&mut others);
                let basis = format!("the {n} weigh-ins before it");
                if let Some((corrected, diag)) = judge(&rows[j], written[j], med, &basis) {
                    kg[j] = corrected;
                    swapped[j] = true;
                    from_previous[j] = true;
                    by_previous.push((j, diag));
                }
            }
        }
        if plausible_kg(kg[j]) {
            recent.push((today, kg[j]));
        }
    }
    // Each conversion above rests on the ones before it, so a stretch that never ends runs to
    // the end of the file. When it holds more weigh-ins than the file before it, the earlier
    // level may as well be the odd one out (the first weeks of someone else's weigh-ins, 0.45
    // times this person's, turned every later weigh-in of 99 kg into 45 kg). The height
    // decides when only one of the two readings of the stretch is a likely weight for it
    // ([`Window::likely_kg`]); otherwise the file is not used: left as written, pounds under
    // `kg` had put a 165 cm woman's weigh-ins at 161 kg and her "regain" at 90 kg, with no
    // word from `check`.
    let open_end = order
        .iter()
        .rev()
        .take_while(|&&j| from_previous[j])
        .count();
    if open_end > rows.len() - open_end {
        let split = rows.len() - open_end;
        let (head, tail) = order.split_at(split);
        let mut before: Vec<f64> = head.iter().map(|&j| kg[j]).collect();
        let mut as_written: Vec<f64> = tail.iter().map(|&j| written[j]).collect();
        let mut converted: Vec<f64> = tail.iter().map(|&j| kg[j]).collect();
        let (before, as_written, converted) = (
            median(&mut before),
            median(&mut as_written),
            median(&mut converted),
        );
        let first = &rows[tail[0]];
        let height = w
            .height_cm
            .map_or(String::new(), |h| format!(" at a height of {h:.0} cm"));
        match (w.likely_kg(as_written), w.likely_kg(converted)) {
            // Converted: the warnings of each row stand.
            (Some(false), Some(true)) => {}
            (Some(true), Some(false)) => {
                for &j in tail {
                    kg[j] = written[j];
                    from_previous[j] = false;
                }
                by_previous.retain(|(r, _)| from_previous[*r]);
                let start = &rows[head[0]];
                diags.push(
                    ctx.warning(format!(
                        "the {split} weigh-in{} before line {} (median {before:.1} kg) are about {:.2} times the {open_end} from there to the end of the file (median {as_written:.1} kg), which alone are a likely weight{height}; all are read as written",
                        if split == 1 { "" } else { "s" },
                        first.line,
                        before / as_written
                    ))
                    .at(start.line, wcol)
                    .field("weight")
                    .expected("weigh-ins of one person in the unit their rows declare")
                    .found(format!("a level of {before:.1} kg until line {}", first.line))
                    .hint("check whether the first weigh-ins are this person's and in the unit their rows declare; correct or remove them"),
                );
            }
            (likely_written, _) => {
                let why = match likely_written {
                    None => "the profile gives no height to tell which is right".to_string(),
                    Some(true) => format!("both readings are likely weights{height}"),
                    Some(false) => format!("neither reading is a likely weight{height}"),
                };
                diags.push(
                    ctx.error(format!(
                        "the weigh-ins from line {} to the end of the file ({open_end} of {}, median {as_written:.1} kg as written) are about {:.2} times the {split} before them (median {before:.1} kg): either they are in the other unit ({converted:.1} kg), or the ones before them are not this person's or in the other unit, and {why}; the file is not used",
                        first.line,
                        rows.len(),
                        as_written / before
                    ))
                    .at(first.line, wcol)
                    .field("weight")
                    .expected("weigh-ins of one person in the unit their rows declare")
                    .found(format!(
                        "`{}` with unit `{}` after weigh-ins around {before:.1} kg",
                        first.value.value,
                        first.value.unit.mass_unit().symbol()
                    ))
                    .hint("correct the unit of the rows in the other unit (or convert their values), or remove the rows that are not this person's"),
                );
                return None;
            }
        }
    }
    diags.extend(by_previous.into_iter().map(|(_, d)| d));

    if let Some(d) = whole_file_in_the_other_unit(&rows, &kg, &swapped, w, wcol, ctx) {
        diags.push(d);
        return None;
    }

    if let Some(d) = mixed_people(&rows, &kg, wcol, ctx) {
        diags.push(d);
        return None;
    }

    let mut out = Vec::new();
    for (r, kg) in rows.into_iter().zip(kg) {
        if !plausible_kg(kg) {
            let shown = match r.value.unit {
                WeightUnit::StLb => format!("`{}`", r.value.unit.show(r.value.value)),
                u => format!("`{}` {}", r.value.value, u.mass_unit().symbol()),
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

/// A whole file in the other unit has no earlier weigh-in to be compared with; the profile's
/// height decides, and the file is refused rather than converted (a real weight would then be
/// read as more than twice or less than half of itself), naming both BMIs:
/// - pounds under `kg`: a BMI of [`HIGH_BMI`] or more as written that would be a likely one in
///   pounds, unless the profile's `high-bmi-checked` says it is real;
/// - kilograms under `lb`: 0.45 times the weight, an underweight person (the report would flag
///   a low BMI and every figure would be wrong): a BMI under [`UNDERWEIGHT_BMI`] as written
///   that would be a likely one in kilograms, unless `low-bmi-checked` says it is real.
///
/// `kg` holds each row's weight as read, `swapped` the rows already read in the other unit.
fn whole_file_in_the_other_unit(
    rows: &[Parsed<RawWeight>],
    kg: &[f64],
    swapped: &[bool],
    w: &Window,
    wcol: Option<u64>,
    ctx: &FileCtx,
) -> Option<Diagnostic> {
    for unit in [WeightUnit::Kg, WeightUnit::Lb] {
        let read: Vec<usize> = (0..rows.len())
            .filter(|&j| rows[j].value.unit == unit && !swapped[j])
            .collect();
        if read.len() * 2 <= rows.len() {
            continue;
        }
        let mut v: Vec<f64> = read.iter().map(|&j| kg[j]).collect();
        let med = median(&mut v);
        // The median as read (kg) and read in the other unit (kg).
        let other = match unit {
            WeightUnit::Kg => Mass::from_lb(med).kg(),
            _ => Mass::from_kg(med).lb(),
        };
        let as_read_wrong = match unit {
            WeightUnit::Kg => {
                w.likely_kg(med) == Some(false) && w.bmi(med).is_some_and(|b| b >= HIGH_BMI)
            }
            _ => !w.low_bmi_checked && w.bmi(med).is_some_and(|b| b < UNDERWEIGHT_BMI),
        };
        if !as_read_wrong || w.likely_kg(other) != Some(true) {
            continue;
        }
        let first = &rows[read[0]];
        let (h, bmi, bmi_other) = (
            w.height_cm.unwrap_or_default(),
            w.bmi(med).unwrap_or_default(),
            w.bmi(other).unwrap_or_default(),
        );
        let n = format!("{} of {}", read.len(), rows.len());
        let d = match unit {
            WeightUnit::Kg => ctx.error(format!(
                "the weigh-ins read as kilograms (median {med:.1} kg, {n}) give a BMI of {bmi:.1} at the profile's height of {h:.0} cm; as pounds ({other:.1} kg) they would give {bmi_other:.1}: they look like pounds under `kg`, and the file is not used"
            ))
            .expected(format!(
                "weigh-ins in the unit their rows declare (as kilograms, a BMI under {HIGH_BMI} at {h:.0} cm)"
            ))
            .found(format!("`{}` with unit `kg`", first.value.value))
            .hint("if the weights are pounds, correct the `unit` column or the header to `lb`; if they are kilograms and the person's BMI is that high, add `high-bmi-checked` to the `flags` of profile.yaml; check the height too"),
            _ => ctx.error(format!(
                "the weigh-ins read as pounds (median {other:.1} lb = {med:.1} kg, {n}) give a BMI of {bmi:.1} at the profile's height of {h:.0} cm, underweight; as kilograms they would give {bmi_other:.1}: they look like kilograms under `lb`, and the file is not used"
            ))
            .expected(format!(
                "weigh-ins in the unit their rows declare (as pounds, a BMI of {UNDERWEIGHT_BMI} or more at {h:.0} cm)"
            ))
            .found(format!("`{}` with unit `lb`", first.value.value))
            .hint("if the weights are kilograms, correct the `unit` column or the header to `kg`; if they are pounds and the person is underweight, add `low-bmi-checked` to the `flags` of profile.yaml (and put the person before a clinician); check the height too"),
        };
        return Some(d.at(first.line, wcol).field("weight"));
    }
    None
}

/// A weights file that holds more than one person's weigh-ins: a scale several people share
/// exports all of them, and a file copied from the wrong folder is added to the right one.
/// Read as one person's, their mean made the baseline (95 kg and 62 kg on the first day gave
/// 78 kg), the trend swung between them, and the report gave a wrong BMI class and a "fast
/// loss" flag, without a word. Neighbouring weigh-ins (at most [`PEOPLE_MIX_MAX_DAYS`] apart,
/// in date and time order, plausible values in kg after the unit check) that differ by more
/// than [`PEOPLE_MIX_JUMP`] are counted; when they are many, the file is refused at the first.
fn mixed_people(
    rows: &[Parsed<RawWeight>],
    kg: &[f64],
    wcol: Option<u64>,
    ctx: &FileCtx,
) -> Option<Diagnostic> {
    let mut order: Vec<usize> = (0..rows.len()).filter(|&i| plausible_kg(kg[i])).collect();
    order.sort_by(|&a, &b| {
        (rows[a].date, &rows[a].value.time, rows[a].line).cmp(&(
            rows[b].date,
            &rows[b].value.time,
            rows[b].line,
        ))
    });
    let (mut pairs, mut jumps) = (0usize, 0usize);
    let mut first = None;
    for w in order.windows(2) {
        let (a, b) = (w[0], w[1]);
        if (rows[b].date - rows[a].date).num_days() > PEOPLE_MIX_MAX_DAYS {
            continue;
        }
        pairs += 1;
        if kg[a].max(kg[b]) > kg[a].min(kg[b]) * (1.0 + PEOPLE_MIX_JUMP) {
            jumps += 1;
            first.get_or_insert((a, b));
        }
    }
    if jumps < PEOPLE_MIX_MIN_JUMPS || (jumps as f64) < PEOPLE_MIX_MIN_SHARE * pairs as f64 {
        return None;
    }
    let (a, b) = first.expect("at least one jump");
    let at = |i: usize| {
        let r = &rows[i];
        match &r.value.time {
            Some(t) => format!("{:.1} kg on {} {t} (line {})", kg[i], r.date, r.line),
            None => format!("{:.1} kg on {} (line {})", kg[i], r.date, r.line),
        }
    };
    let pct = (PEOPLE_MIX_JUMP * 100.0).round();
    Some(
        ctx.error(format!(
            "{jumps} of {pairs} weigh-ins taken within a day of the one before differ from it by \
             more than {pct} %; body weight does not change that fast, so the file seems to hold \
             more than one person's weigh-ins and is not used"
        ))
        .at(rows[b].line, wcol)
        .field("weight")
        .expected(format!(
            "one person's weigh-ins, each within {pct} % of the one before it in the same or the \
             next day"
        ))
        .found(format!("{} after {}", at(b), at(a)))
        .hint(
            "a scale several people share exports everyone's weigh-ins: keep only this \
             participant's rows (or fix the values), then run again",
        ),
    )
}

#[derive(Debug, Clone)]
struct RawIntake {
    kcal: f64,
    macros: [Option<f64>; 4],
    /// Marked as the day's total (`Total` in a `Meal` column).
    total: bool,
}

/// Labels of a food diary's row that totals the day's other rows (in a column of its own, such
/// as `Meal`).
const TOTAL_LABELS: [&str; 14] = [
    "total",
    "totals",
    "daily total",
    "day total",
    "sum",
    "summe",
    "gesamt",
    // The same in the other languages of [`SUMMARY_LABELS`].
    "somme",
    "suma",
    "totale",
    "somma",
    "soma",
    "totaal",
    "totalt",
];

/// How far a day's `Total` row may be from the sum of its other rows and still be their total:
/// diaries print each row rounded (common practice).
fn total_matches(total: f64, sum: f64) -> bool {
    (total - sum).abs() <= (0.005 * sum).max(2.0)
}

impl SameValue for RawIntake {
    fn same_value(&self, o: &Self) -> bool {
        self.total == o.total
            && same_f64(self.kcal, o.kcal)
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
    // The first energy whose unit in the cell disagrees with the header's.
    let mut conflicts: Vec<UnitConflict> = Vec::new();
    let mut declared_rows = 0usize;
    // Whether any cell wrote its energy unit (then an `Energy` header needs none).
    let mut units_in_cells = false;
    let rows = parse_rows(&table, ctx, opts, w, diags, |c, d| {
        // A day's `Average` (or `Max`…) row beside its meals is no meal (its `Total` row is
        // checked against them below).
        if let Some(label) = c.table.row_label(c.row, &SUMMARY_LABELS)
            && !is_label(label, &TOTAL_LABELS)
        {
            c.summary_row(label);
            return None;
        }
        let raw = c.required_text("kcal", d)?;
        // A unit may be written in the cell (`1,850 kcal`, `7950 kJ`), as diaries print them.
        let (num, in_cell) = match split_value_unit(&raw) {
            // No number first (`n/a`): read as a number, which names what was found.
            ("", _) => (raw.as_str(), None),
            (num, None) => (num, None),
            (num, Some(u)) => match energy_unit(u) {
                Some(kj) => (num, Some(kj)),
                None => {
                    d.push(
                        c.warn(
                            "kcal",
                            "unknown energy unit in the cell; the row is dropped",
                        )
                        .expected("kcal (`1850`, `1850 kcal`, `1850 Cal`) or kJ (`7950 kJ`)")
                        .found(format!("`{raw}`")),
                    );
                    return None;
                }
            },
        };
        // A `Unit` column beside the energy (`Date;Energy;Unit` with `kcal` or `kJ` on each
        // row, as some food diaries export): it is no column of ours, and a row in kJ
        // (`7900;kJ` among kcal rows) was read as 7,900 kcal, with only a note that the column
        // is not read. Its energy units are read as a unit in the cell would be; anything else
        // there (a serving's `g` or `cup`) is not an energy unit and is left alone.
        let in_column = in_cell
            .is_none()
            .then(|| c.table.unread_cell(c.row, super::table::UNIT_COLUMNS))
            .flatten()
            .and_then(energy_unit);
        if in_column.is_some() {
            c.table.recognised(
                "energy units (`kcal`, `kJ`) read from the unit column beside the energy, each row in its own",
            );
        }
        let in_cell_only = in_cell;
        let in_cell = in_cell.or(in_column);
        let mut kcal = c.parse_number("kcal", num, "the row is dropped", d)?;
        let header_kj = c.table.header_unit("kcal").map(|u| u == "kj");
        declared_rows += usize::from(header_kj.is_some());
        if let (Some(cell_kj), Some(said_kj)) = (in_cell, header_kj)
            && cell_kj != said_kj
        {
            let name = |kj: bool| if kj { "kJ" } else { "kcal" };
            conflicts.push(UnitConflict {
                line: c.row.line,
                column: c.table.column("kcal"),
                field: "kcal",
                what: "energy",
                raw: raw.to_string(),
                written: name(cell_kj).to_string(),
                by: format!(
                    "the header `{}` says {}",
                    c.table.written_header("kcal").unwrap_or("kcal"),
                    name(said_kj)
                ),
                said: name(said_kj).to_string(),
            });
            return None;
        }
        if in_cell.is_some() {
            units_in_cells = true;
        }
        if in_cell_only.is_some() {
            c.table
                .recognised("energy with its unit in the cell (`1,850 kcal`, `7950 kJ`)");
        }
        if in_cell.or(header_kj) == Some(true) {
            kcal /= KJ_PER_KCAL;
        }
        if kcal < 0.0 {
            d.push(
                c.warn("kcal", "negative energy; the row is dropped")
                    .expected("kcal ≥ 0")
                    .found(format!("`{kcal}`")),
            );
            return None;
        }
        let mut macros = [None; 4];
        for ((slot, col), kcal_per_g) in macros.iter_mut().zip(MACROS).zip(ATWATER_KCAL_PER_G) {
            // Grams may be written in the cell (`45 g`).
            let grams = c.text(col).map(|t| match split_value_unit(t) {
                (num, Some(u)) if u.eq_ignore_ascii_case("g") => {
                    c.table.recognised("grams written in the cells (`45 g`)");
                    num
                }
                _ => t,
            });
            let read = match grams {
                None => Ok(None),
                Some(t) => c
                    .parse_number(col, t, "the value is ignored", d)
                    .map(Some)
                    .ok_or(Dropped),
            };
            match read {
                Ok(Some(v)) if v < 0.0 => d.push(
                    c.warn(col, format!("negative `{col}`; the value is ignored"))
                        .expected("grams ≥ 0")
                        .found(format!("`{v}`")),
                ),
                // More grams of one nutrient in one row than the most anyone eats in a day
                // ([`MAX_KCAL_PER_DAY`]) could hold: 99,999,999 g of protein reached the
                // reports and external modules without a word.
                Ok(Some(v)) if v * kcal_per_g > MAX_KCAL_PER_DAY => {
                    let most = (MAX_KCAL_PER_DAY / kcal_per_g).floor();
                    d.push(
                        c.warn(col, format!("implausible `{col}`; the value is ignored"))
                            .expected(format!(
                                "at most {} g ({} kcal at {kcal_per_g} kcal/g, the most intake a day holds)",
                                crate::diag::thousands(most as usize),
                                crate::diag::thousands(MAX_KCAL_PER_DAY as usize),
                            ))
                            .found(format!("`{v}`"))
                            .hint("check for a typing error (an extra digit, milligrams instead of grams)"),
                    )
                }
                Ok(v) => *slot = v,
                Err(Dropped) => {}
            }
        }
        // The energy of the row's carbohydrate, fat and protein (free sugars are part of the
        // carbohydrate) far above its kcal: the kcal or one of the grams is mistyped, and
        // which cannot be told.
        let [carbs, fat, protein, _] = macros;
        let macro_kcal = [(carbs, 0), (fat, 1), (protein, 2)]
            .iter()
            .filter_map(|&(g, i)| g.map(|g| g * ATWATER_KCAL_PER_G[i]))
            .sum::<f64>();
        let most = MACRO_ENERGY_MAX_RATIO * kcal + MACRO_ENERGY_MARGIN_KCAL;
        if macro_kcal > most {
            let named: Vec<String> = [(carbs, "carbs_g"), (fat, "fat_g"), (protein, "protein_g")]
                .iter()
                .filter_map(|&(g, n)| g.map(|g| format!("{n} {g}")))
                .collect();
            d.push(
                c.warn(
                    "kcal",
                    "the row's grams hold far more energy than its kcal; the row is dropped",
                )
                .expected(format!(
                    "carbohydrate, fat and protein at 4, 9 and 4 kcal/g (Atwater) giving at most {} × kcal + {} kcal ({} kcal)",
                    MACRO_ENERGY_MAX_RATIO,
                    MACRO_ENERGY_MARGIN_KCAL,
                    most.round()
                ))
                .found(format!(
                    "kcal `{kcal}`, {} ({} kcal)",
                    named.join(", "),
                    macro_kcal.round()
                ))
                .hint("check the kcal and the grams for a typing error"),
            );
            return None;
        }
        let total = c.table.row_labelled(c.row, &TOTAL_LABELS);
        Some(RawIntake {
            kcal,
            macros,
            total,
        })
    });
    if !settle_unit_conflicts(&conflicts, declared_rows, ctx, diags) {
        return None;
    }
    note_identical_same_day(
        &rows,
        "intake rows",
        "are each counted in the day's total",
        ctx,
    );
    let rows = in_window(rows, w, true, &table, ctx, diags);
    table.describe(opts, ctx);
    let rows = drop_total_rows(rows, &table, ctx, diags);

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
    // An `Energy` column without a unit: kcal in some exports, kJ in others (apps of
    // kilojoule countries). Daily totals whose median is above what anyone logs in kcal are
    // kJ; read as kcal they were taken as four times the intake, without a word.
    if let Some(written) = table.written_as("kcal")
        // `Dietary Energy`: phone health apps write kJ or kcal by the phone's region.
        && matches!(header_key(written).0.as_str(), "energy" | "dietary_energy")
        && table.header_unit("kcal").is_none()
        && !units_in_cells
        && days.len() >= 3
    {
        let mut totals: Vec<f64> = days.values().map(|d| d.kcal).collect();
        let m = median(&mut totals);
        if m > KJ_LIKE_MEDIAN_KCAL {
            diags.push(
                ctx.error(format!(
                    "column `{written}` has no unit and its daily totals (median {}) look like kilojoules, not kcal; the file is not used",
                    crate::diag::thousands(m.round() as usize)
                ))
                .at(table.header_line, kcol)
                .field("kcal")
                .expected(format!("kcal, with daily totals mostly below {}", crate::diag::thousands(KJ_LIKE_MEDIAN_KCAL as usize)))
                .found(format!("`{written}`, median daily total {}", crate::diag::thousands(m.round() as usize)))
                .hint(format!("write the unit in the header: `{written} (kJ)` or `{written} (kcal)`")),
            );
            return None;
        }
    }
    // A column that says kcal but holds kilojoules (a kJ export whose header was renamed, or a
    // template filled in with kJ): daily totals far above what anyone logs for weeks. Only the
    // days over 10,000 were dropped, and the report said "Intake you logged (average) 8,830
    // kcal/day".
    if kcol.is_some() && table.header_unit("kcal") != Some("kj") && days.len() >= 3 {
        let written = table.written_as("kcal").unwrap_or("kcal");
        let mut totals: Vec<f64> = days.values().map(|d| d.kcal).collect();
        let m = median(&mut totals);
        if m > KJ_LIKE_MEDIAN_NAMED_KCAL {
            let median = crate::diag::thousands(m.round() as usize);
            diags.push(
                ctx.error(format!(
                    "the daily totals of column `{written}` have a median of {median} kcal, which nobody logs for weeks; they look like kilojoules ({median} kJ is about {} kcal); the file is not used",
                    crate::diag::thousands((m / KJ_PER_KCAL).round() as usize)
                ))
                .at(table.header_line, kcol)
                .field("kcal")
                .expected(format!(
                    "kcal, with daily totals mostly below {}",
                    crate::diag::thousands(KJ_LIKE_MEDIAN_NAMED_KCAL as usize)
                ))
                .found(format!("`{written}`, median daily total {median}"))
                .hint("if the values are kilojoules, say so in the header (`Energy (kJ)`), and they are converted; if they are kcal, check the export"),
            );
            return None;
        }
    }
    let mut out = Vec::new();
    // The rows of the days kept, before they are summed.
    let mut used = Vec::new();
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
        used.push((date, day.lines.len()));
        out.push(IntakeDay {
            date,
            kcal: day.kcal,
            carbs_g,
            fat_g,
            protein_g,
            free_sugars_g,
        });
    }
    ctx.set_rows_used_by_day(used);
    Some(out)
}

/// An energy unit written in a cell: `Some(true)` for kilojoules, `Some(false)` for kilocalories
/// (`Cal`, `cal` and `calories` on food labels and in diaries are kilocalories).
fn energy_unit(u: &str) -> Option<bool> {
    match u.trim().trim_end_matches('.').to_lowercase().as_str() {
        "kj" | "kilojoule" | "kilojoules" => Some(true),
        "kcal" | "kcals" | "cal" | "cals" | "calorie" | "calories" | "kilocalorie"
        | "kilocalories" => Some(false),
        _ => None,
    }
}

/// A food diary's `Total` rows among the day's meals: summed with them, every such day was
/// taken at twice its intake without a word. A total that matches the sum of the day's other
/// rows is left out (noted); one that does not leaves the day unknown (its rows are dropped
/// with a warning: the meals or the total are wrong, and which cannot be told). A `Total` row
/// alone on its day is the day's intake.
fn drop_total_rows(
    rows: Vec<Parsed<RawIntake>>,
    table: &Table,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Vec<Parsed<RawIntake>> {
    if !rows.iter().any(|r| r.value.total) {
        return rows;
    }
    /// A day's other rows (their sum and number) and its totals (line, kcal).
    type DayTotals = (f64, usize, Vec<(u64, f64)>);
    let mut days: BTreeMap<NaiveDate, DayTotals> = BTreeMap::new();
    for r in &rows {
        let day = days.entry(r.date).or_default();
        if r.value.total {
            day.2.push((r.line, r.value.kcal));
        } else {
            day.0 += r.value.kcal;
            day.1 += 1;
        }
    }
    let kcol = table.column("kcal");
    let (mut matched, mut first) = (0usize, None);
    let mut unknown_days = std::collections::BTreeSet::new();
    for (date, (sum, others, totals)) in &days {
        if totals.is_empty() || (*others == 0 && totals.len() == 1) {
            continue;
        }
        if *others > 0 && totals.iter().all(|(_, t)| total_matches(*t, *sum)) {
            matched += totals.len();
            first.get_or_insert(totals[0].0);
            continue;
        }
        let (line, t) = totals[0];
        unknown_days.insert(*date);
        diags.push(
            ctx.warning(format!(
                "line {line} is the total of {date}, but its {} kcal are not the sum of the day's other rows ({} kcal); the day is dropped, as which is right cannot be told",
                t, sum
            ))
            .at(line, kcol)
            .field("kcal")
            .expected(format!("a total equal to the day's other rows, {sum} kcal"))
            .found(format!("{t} kcal"))
            .hint("correct the day's rows or its total, or delete the total rows (the tool sums a day's rows itself)"),
        );
    }
    if let Some(line) = first {
        let rows = if matched == 1 {
            "1 row"
        } else {
            &format!("{matched} rows")
        };
        ctx.note(format!(
            "{rows} giving a day's total of the other rows (first on line {line}) left out: the day's rows are summed"
        ));
    }
    rows.into_iter()
        .filter(|r| {
            let total_of_others = r.value.total && days[&r.date].1 > 0;
            // A day's total beside its other rows sums them up: no data row of the file.
            if total_of_others {
                ctx.uncount_row();
            }
            !(unknown_days.contains(&r.date) || total_of_others)
        })
        .collect()
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
            && self.censored == o.censored
    }
}

/// A cell's value for a message's "found": the text as written, and what it was read as when
/// that is not the same number (`20 h` is "`20 h` (read as 1200 minutes)"); never the number
/// alone, which may be in no file (`99999999999999999` prints as `100000000000000000`).
/// A number as a note quotes it: up to three decimals, without trailing zeros (`156`,
/// `196.5`), so a sum such as 14 × 14 + 2.3 is not printed as `198.29999999999998`.
fn plain_number(x: f64) -> String {
    let s = format!("{x:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" { "0".into() } else { s.into() }
}

fn as_written(c: &Cells<'_>, col: &str, value: f64, unit: &str) -> String {
    let raw = c.text(col).unwrap_or_default().trim();
    if raw.is_empty() {
        format!("`{value}`")
    } else if raw.parse::<f64>().is_ok_and(|x| x == value) {
        format!("`{raw}`")
    } else {
        format!("`{raw}` (read as {value} {unit})")
    }
}

/// An activity's minutes from its start (the date column) and its end (`end`), both
/// date-times: the row is dropped, with a warning at the end's cell, when either has no time
/// of day, the end is before the start, or the span is longer than one activity can last
/// ([`MAX_ACTIVITY_MINUTES`]). A span across midnight is dated by the start.
///
/// A time of day alone under a header that says UTC (`Start Time (UTC)`, `End Time (UTC)`
/// beside a `Date` column) is that time on the row's date in UTC, converted to
/// `input.time_zone` as a weigh-in's UTC time is; with it comes the start's local day
/// (`Some` only then), on which the row counts. Such times were read as local times: with
/// Europe/Berlin, `2026-05-04,23:30,23:50` read as 20 minutes on 4 May, not on 5 May
/// (01:30–01:50 local), and in America/New_York `2026-09-11,02:00,02:40` counted on 11 Sep,
/// not on the evening of 10 Sep when it happened.
fn span_minutes(c: &Cells<'_>, d: &mut Vec<Diagnostic>) -> Option<(f64, Option<When>)> {
    // The row's date was read (and any problem with it named) before the row's values.
    let day = c.when("date", &mut Vec::new())?;
    // A start or end beside a date column may be a time of day alone (`07:10`, `7:10 PM`):
    // on the row's day, or for the end, on the start's day.
    let time_only = |s: &str| {
        ["%H:%M", "%H:%M:%S", "%I:%M %p", "%I:%M:%S %p"]
            .iter()
            .find_map(|f| NaiveTime::parse_from_str(s, f).ok())
    };
    // A time of day alone under a UTC header: the instant, and the local date and time.
    type Utc = Option<chrono::DateTime<chrono::FixedOffset>>;
    let at = |col: &str, on: NaiveDate, d: &mut Vec<Diagnostic>| -> Option<(When, Utc)> {
        let raw = c.required_text(col, d)?;
        match time_only(&raw) {
            Some(t) if c.table.span_in_utc(col) => {
                let instant = on.and_time(t).and_utc().fixed_offset();
                let local = match &c.opts.time_zone {
                    Some(z) => z.local(instant),
                    None => instant.naive_utc(),
                };
                Some((
                    When {
                        date: local.date(),
                        time: Some(local.time()),
                        from_utc: true,
                    },
                    Some(instant),
                ))
            }
            Some(t) => Some((
                When {
                    date: on,
                    time: Some(t),
                    from_utc: false,
                },
                None,
            )),
            None => c.when(col, d).map(|w| (w, None)),
        }
    };
    let start_col = if c.table.column("start").is_some() {
        "start"
    } else {
        "date"
    };
    let (start, start_utc) = if start_col == "start" {
        at("start", day.date, d)?
    } else {
        (day, None)
    };
    // A time alone is on the start's day as written: its UTC day for a UTC start.
    let end_on = start_utc.map_or(start.date, |t| t.date_naive());
    let (mut end, mut end_utc) = at("end", end_on, d)?;
    // Two UTC times of day, the end before the start (`23:30` to `00:30`: an evening in the
    // Americas crosses UTC midnight) were dropped as ending before they start. The end is on
    // the next UTC day when that reading is the nearer one (under 12 hours; common practice):
    // `03:50` to `03:40` is still a slip, not an activity of 23 hours 50 minutes.
    if let (Some(u0), Some(u1)) = (start_utc, end_utc)
        && u1 < u0
        && u0 - u1 > chrono::TimeDelta::hours(12)
        && let Some(next) = end_on.succ_opt()
    {
        (end, end_utc) = at("end", next, d)?;
    }
    // The same for two local times of day (`23:30` to `00:15` under `Start Time`, `End Time`
    // beside a `Date`): such a row was dropped as ending before it starts, while the UTC pair
    // was read. One rule for both: an end written as a time alone that is more than 12 hours
    // before the start is on the next day.
    if start_utc.is_none()
        && end_utc.is_none()
        && time_only(c.text("end").unwrap_or_default().trim()).is_some()
        && let (Some(t0), Some(t1)) = (start.time, end.time)
        && end.date == start.date
        && t0 - t1 > chrono::TimeDelta::hours(12)
        && let Some(next) = end.date.succ_opt()
    {
        end.date = next;
    }
    let (start_raw, end_raw) = (
        c.text(start_col).unwrap_or_default(),
        c.text("end").unwrap_or_default(),
    );
    let found = format!("start `{start_raw}`, end `{end_raw}`");
    let (Some(t0), Some(t1)) = (start.time, end.time) else {
        d.push(
            c.warn("end", "the activity's start or end has no time of day, so its duration cannot be told; the row is dropped")
                .expected("a start and an end with their times (`2026-05-04 07:10` to `2026-05-04 07:52`)")
                .found(found)
                .hint("export the activities with their start and end times, or with a duration column"),
        );
        return None;
    };
    let (local0, local1) = (start.date.and_time(t0), end.date.and_time(t1));
    let minutes = match (&c.opts.time_zone, start_utc, end_utc) {
        (_, Some(u0), Some(u1)) => (u1 - u0).num_seconds() as f64 / 60.0,
        // Without `input.time_zone` the two clock times are taken as written, on one clock
        // (as before the zone was read here): an activity across a daylight-saving change is
        // an hour off, which only the zone can tell.
        (None, ..) => (local1 - local0).num_seconds() as f64 / 60.0,
        (Some(zone), u0, u1) => {
            let t0 = match u0 {
                Some(t) => t,
                None => zoned_instant(c, start_col, local0, zone, &found, d)?,
            };
            let t1 = match u1 {
                Some(t) => t,
                None => zoned_instant(c, "end", local1, zone, &found, d)?,
            };
            (t1 - t0).num_seconds() as f64 / 60.0
        }
    };
    if minutes < 0.0 {
        d.push(
            c.warn(
                "end",
                "the activity ends before it starts; the row is dropped",
            )
            .expected("an end after the start")
            .found(found)
            .hint("check the two times of this row (start and end swapped, or a wrong day); an activity across midnight needs its end written with its date"),
        );
        return None;
    }
    if minutes > MAX_ACTIVITY_MINUTES {
        d.push(
            c.warn("end", format!(
                "the activity lasts {} minutes from start to end, longer than one activity can; the row is dropped",
                minutes.round()
            ))
            .expected(format!("at most {MAX_ACTIVITY_MINUTES} minutes from start to end"))
            .found(found)
            .hint("check the end's day; a tracker left running is no activity"),
        );
        return None;
    }
    c.table
        .recognised("durations as the time from each activity's start to its end");
    if start.from_utc {
        c.table.note_utc_converted();
    }
    Some((minutes, Some(start).filter(|s| s.from_utc)))
}

/// The instant of an activity's start or end (`col`, read as the local `local`) in the
/// program's zone: a time written with its offset or as UTC is that instant; a local time is
/// placed by the zone's daylight-saving rules (IANA tzdata), so an activity across the change
/// lasts what it lasted. A local time the clocks skipped (02:30 on a spring-forward night in
/// Europe/Berlin) names no instant: a warning at its cell, and the row is dropped. One that
/// happens twice (02:30 on a fall-back night) is taken at the earlier offset (summer time, the
/// first time the clock shows it), with a warning at its cell saying so: RFC 5545 §3.3.5 takes
/// a repeated local time as its first occurrence (from memory).
fn zoned_instant(
    c: &Cells<'_>,
    col: &str,
    local: chrono::NaiveDateTime,
    zone: &LocalZone,
    found: &str,
    d: &mut Vec<Diagnostic>,
) -> Option<chrono::DateTime<chrono::FixedOffset>> {
    if let Some(t) = c.instant(col) {
        return Some(t);
    }
    let shown = local.format("%Y-%m-%d %H:%M");
    let name = zone.name();
    match zone.resolve(local) {
        chrono::LocalResult::Single(t) => Some(t),
        chrono::LocalResult::Ambiguous(first, second) => {
            d.push(
                c.warn(col, format!(
                    "`{shown}` happens twice in {name} (the clocks go back an hour that night); read as the first, at {} (the earlier offset), not {}",
                    first.offset(), second.offset()
                ))
                .expected(format!("a local time that happens once in {name}, or a time with its offset"))
                .found(found.to_string())
                .hint("export the activities with their offsets or in UTC, or with a duration column"),
            );
            Some(first)
        }
        chrono::LocalResult::None => {
            d.push(
                c.warn(col, format!(
                    "`{shown}` does not exist in {name} (the clocks go forward an hour that night), so the activity's duration cannot be told; the row is dropped"
                ))
                .expected(format!("a local time that exists in {name}, or a time with its offset"))
                .found(found.to_string())
                .hint("a device whose clock had not changed yet writes such times: export the activities with their offsets or in UTC, or with a duration column"),
            );
            None
        }
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
    // Whether a unit column beside the duration gives durations' units in some row (`min`,
    // `h`): then a unit of its that is none (`Std.`) is an unknown unit, not another value's.
    // A bare `m` tells nothing: it is also a distance's metres (swims in `m`, runs in `km`).
    let is_duration_unit = |u: &str| {
        !u.trim().eq_ignore_ascii_case("m")
            && matches!(
                split_duration(&format!("1 {u}")),
                WrittenDuration::Units(..)
            )
    };
    let duration_units_column = table.header_unit("minutes").is_none()
        && table.rows.iter().any(|r| {
            table
                .unread_cell(r, super::table::UNIT_COLUMNS)
                .is_some_and(is_duration_unit)
        });
    // Unknown labels: (rows, first line), reported once per label.
    let mut unknown: BTreeMap<String, (usize, u64)> = BTreeMap::new();
    // The first duration whose unit in the cell disagrees with the header's.
    let mut conflicts: Vec<UnitConflict> = Vec::new();
    let mut declared_rows = 0usize;
    // Whether the file's note already quotes its first h:mm:ss duration.
    let mut clock_noted = false;
    // Durations with one colon (`45:00`, `1:30`) are minutes:seconds or hours:minutes. An app
    // writes every duration of its export one way; when one of them read as hours:minutes
    // would be longer than an activity can last (`45:00` as 45 hours), the file writes
    // minutes:seconds, and all its such durations are read so (the first such cell is named
    // in the note). Otherwise which way cannot be told, and those rows are dropped. Rows dated
    // after a withdrawal of consent are not read (`parse_rows`) and tell nothing either: a
    // `45:00` synced after it made an earlier `1:30` read as 1.5 minutes. A row whose date does
    // not read as a plain date (`parse_when`) is then no evidence: it may be one of them.
    let consent_withdrawn = w.withdrew.filter(|_| !w.follow_up_weigh_ins);
    let read_before_withdrawal = |r: &super::table::Row| {
        consent_withdrawn.is_none_or(|x| {
            table
                .get(r, "date")
                .and_then(|s| super::table::parse_when(s, opts))
                .is_some_and(|when| when.date <= x)
        })
    };
    let minutes_seconds = table
        .rows
        .iter()
        .filter(|r| read_before_withdrawal(r))
        .find_map(|r| {
            let raw = table.get(r, "minutes")?;
            match split_duration(raw) {
                WrittenDuration::Ambiguous(h, m) if h * 60.0 + m > MAX_ACTIVITY_MINUTES => {
                    Some(raw.to_string())
                }
                _ => None,
            }
        });
    let mmss_note: Option<String> = minutes_seconds.as_ref().map(|raw| {
        format!(
            "durations with one colon read as minutes:seconds, as `{raw}` shows (as hours:minutes it would be longer than an activity can last)"
        )
    });
    // A phone's export lists each day's step count in a row of its own beside the day's
    // workouts: such a row is no activity, and is noted, not warned about (each was "`activity`
    // is empty", every run ending with warnings). In a file with no workout at all, nothing
    // would be read: its rows keep their warnings.
    let workouts = table.rows.iter().any(|r| table.gives_workout(r));
    let rows = parse_rows(&table, ctx, opts, w, diags, |c, d| {
        if workouts && c.table.is_step_count(c.row) {
            c.table.step_count_row(c.row);
            return None;
        }
        let activity = c.required_text("activity", d)?;
        // A log's `Total` row is no activity: with a `met` value it was added to the day's
        // activities as one more.
        if is_label(&activity, &SUMMARY_LABELS) {
            c.summary_row(&activity);
            return None;
        }
        if let Some(label) = c.table.row_label(c.row, &SUMMARY_LABELS) {
            c.summary_row(label);
            return None;
        }
        // The unit the header names for bare numbers, and minutes per such unit.
        let (header_unit, per_unit) = match c.table.header_unit("minutes") {
            Some("h" | "hr" | "hours") => ("h", 60.0),
            Some("s" | "sec" | "secs" | "seconds") => ("s", 1.0 / 60.0),
            _ => ("min", 1.0),
        };
        // A header that says how its durations are written as clock times (`Duration
        // (h:mm)`, `Time (mm:ss)`, `Duration (hh:mm:ss)`): it tells a one-colon duration's
        // reading, and a bare number under it is no such duration.
        let clock_header = c.table.header_unit("minutes").filter(|u| u.contains(':'));
        declared_rows += usize::from(c.table.header_unit("minutes").is_some());
        // No duration column, but each activity's end: the minutes are end − start.
        let from_span = c.table.column("minutes").is_none() && c.table.column("end").is_some();
        let raw = if from_span {
            String::new()
        } else {
            c.required_text("minutes", d)?
        };
        // A unit column beside a bare number (`Duration,Unit` with `30,min` and `1,h`), which
        // is no column of ours: `1,h` was read as 1 minute. The number is read with the unit
        // as if written in its cell (`1 h`); a unit that is no duration's leaves it as it was,
        // and so does any under a header that names the duration's unit (`Duration (h)` beside
        // `Distance,Unit` with `m`: metres, which read as minutes dropped the row).
        let unit_column = c
            .table
            .header_unit("minutes")
            .is_none()
            .then(|| c.table.unread_cell(c.row, super::table::UNIT_COLUMNS))
            .flatten();
        let raw = match (split_duration(&raw), unit_column) {
            (WrittenDuration::Plain(_), Some(u))
                if matches!(
                    split_duration(&format!("{raw} {u}")),
                    WrittenDuration::Units(..)
                ) =>
            {
                format!("{raw} {u}")
            }
            // In a column of durations' units, one the reader does not know (`2,Std.`) was
            // read as 2 minutes without a word.
            (WrittenDuration::Plain(_), Some(u)) if duration_units_column => {
                d.push(
                    c.warn("minutes", "unknown duration unit in the unit column; the row is dropped")
                        .expected("a duration unit beside the number, as the column's other rows give: `min`, `h` or `s`")
                        .found(format!("`{raw}` with unit `{u}`"))
                        .hint("write the unit as `min`, `h` or `s`, or the duration with its unit in the cell (`2 h`)"),
                );
                return None;
            }
            _ => raw,
        };
        // The start's local day, when a UTC start moved it off the row's date.
        let mut local_start = None;
        let minutes = match split_duration(&raw) {
            _ if from_span => {
                let (m, start) = span_minutes(c, d)?;
                local_start = start;
                m
            }
            WrittenDuration::Plain(_) if let Some(h) = clock_header => {
                d.push(
                    c.warn("minutes", format!("a number alone under a header of durations written as `{h}`: minutes, hours or seconds cannot be told; the row is dropped"))
                        .expected(format!("a duration written as `{h}`, or with its unit (`45 min`)"))
                        .found(format!("`{raw}`"))
                        .hint("export every duration the same way, or write the unit with the number"),
                );
                return None;
            }
            WrittenDuration::Plain(_) | WrittenDuration::Other => {
                let v = c.number("minutes", d)?;
                v * per_unit
            }
            WrittenDuration::Clock(m) => {
                // The file's own first, as for stones and pounds.
                if !std::mem::replace(&mut clock_noted, true) {
                    c.table.recognised(format!(
                        "durations as h:mm:ss (`{}` = {} minutes, the file's first)",
                        raw.trim(),
                        plain_number(m)
                    ));
                }
                m
            }
            WrittenDuration::Units(m, unit) => {
                // One unit in the cell that the header contradicts (`45 min` under
                // `Duration (h)`): which is right cannot be known.
                if let (Some(u), Some(h)) = (unit, c.table.header_unit("minutes"))
                    && clock_header.is_none()
                    && u != header_unit
                {
                    conflicts.push(UnitConflict {
                        line: c.row.line,
                        column: c.table.column("minutes"),
                        field: "minutes",
                        what: "duration",
                        raw: raw.to_string(),
                        written: u.to_string(),
                        by: format!(
                            "the header `{}` says {h}",
                            c.table.written_header("minutes").unwrap_or("minutes")
                        ),
                        said: h.to_string(),
                    });
                    return None;
                }
                c.table
                    .recognised("durations with their units (`45 min`, `1 h 15 min`)");
                m
            }
            WrittenDuration::Ambiguous(a, b)
                if let Some(h) = clock_header.filter(|h| h.matches(':').count() == 1) =>
            {
                c.table.recognised(format!(
                    "durations with one colon read as `{h}`, as the duration column's header says"
                ));
                if h.starts_with('h') {
                    a * 60.0 + b
                } else {
                    a + b / 60.0
                }
            }
            WrittenDuration::Ambiguous(m, sec) if mmss_note.is_some() => {
                c.table.recognised(mmss_note.clone().expect("checked"));
                m + sec / 60.0
            }
            WrittenDuration::Ambiguous(..) => {
                d.push(
                    c.warn("minutes", "a duration with one colon could be minutes:seconds or hours:minutes, and no duration of the file tells which; the row is dropped")
                        .expected("minutes (`45`), a clock duration h:mm:ss (`0:45:00`) or a duration with units (`45 min`, `1 h 15 min`)")
                        .found(format!("`{raw}`"))
                        // The fix the README gives (a clock form in the header) was not
                        // named: only a new export, which the app may not offer.
                        .hint(format!(
                            "say which in the column's header: `{h} (h:mm)` for hours:minutes or `{h} (mm:ss)` for minutes:seconds; or export durations as h:mm:ss or in minutes",
                            h = c
                                .table
                                .header_written("minutes")
                                .and_then(|h| h.split(" (").next())
                                .unwrap_or("Duration")
                        )),
                );
                return None;
            }
        };
        if !(0.0..=MAX_ACTIVITY_MINUTES).contains(&minutes) {
            d.push(
                c.warn("minutes", "implausible minutes; the row is dropped")
                    .expected(format!("0 to {MAX_ACTIVITY_MINUTES} minutes"))
                    .found(as_written(c, "minutes", minutes, "minutes"))
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
                            .found(as_written(c, "met", m, "MET")),
                    );
                    return None;
                }
                (m, "given in file".to_string())
            }
            None => match activities::resolve(&activity, &opts.activities) {
                Some(r) => (r.met, r.source),
                None => {
                    // Reported once per label after the file is read.
                    let e = unknown
                        .entry(activity.clone())
                        .or_insert((0usize, c.row.line));
                    e.0 += 1;
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
                        .found(as_written(c, "steps", s, "steps")),
                );
                None
            }
            Ok(s) => s,
            Err(Dropped) => None,
        };
        Some((activity, minutes, met, met_source, steps, local_start))
    });
    // A row whose start was a UTC time counts on the start's local day.
    let rows: Vec<_> = rows
        .into_iter()
        .map(|r| {
            let (activity, minutes, met, met_source, steps, local) = r.value;
            Parsed {
                line: r.line,
                date: local.map_or(r.date, |w| w.date),
                time: local.map_or(r.time, |w| w.time),
                value: (activity, minutes, met, met_source, steps),
            }
        })
        .collect();
    if !settle_unit_conflicts(&conflicts, declared_rows, ctx, diags) {
        return None;
    }
    let acol = table.column("activity");
    // Each unknown label gets its own warning with suggestions, up to the diagnostics kept of
    // one kind: the labels of most rows. The rest are counted in one warning (a file of 49,000
    // distinct labels spent seconds on suggestions nobody would read, one warning each).
    let mut ranked: Vec<(&String, &(usize, u64))> = unknown.iter().collect();
    ranked.sort_by(|a, b| b.1.0.cmp(&a.1.0).then(a.1.1.cmp(&b.1.1)));
    let rest = ranked.split_off(ranked.len().min(crate::limits::MAX_DIAGNOSTICS_PER_KIND));
    ranked.sort_by(|a, b| a.0.cmp(b.0));
    let more = rest.iter().map(|(_, (_, l))| *l).min().map(|first| {
        let rows: usize = rest.iter().map(|(_, (n, _))| n).sum();
        ctx.warning(format!(
                "{} more unknown activities in {} rows (first at line {first}); without a MET value these rows are dropped",
                crate::diag::thousands(rest.len()),
                crate::diag::thousands(rows)
            ))
            .at(first, acol)
            .field("activity")
            .expected("an activity the tool knows, a label from program.yaml's `activities:`, or any label with a `met` value")
            .hint("the labels of most rows are listed one by one above; check that this is an activity file, and add a `met` column")
    });
    for (label, (n, first)) in ranked {
        let near = activities::suggestions(label, &opts.activities, 3)
            .iter()
            .map(|s| format!("`{s}`"))
            .collect::<Vec<_>>()
            .join(", ");
        let how = if has_met_column {
            "fill in the `met` value of these rows"
        } else {
            "add a `met` column with the MET value"
        };
        let rows = if *n == 1 { "row" } else { "rows" };
        diags.push(
            ctx.warning(format!(
                "unknown activity `{label}` in {n} {rows} (first at line {first}); without a MET value the {rows} {} dropped",
                if *n == 1 { "is" } else { "are" }
            ))
            .at(*first, acol)
            .field("activity")
            .expected("an activity the tool knows (a walk, run or ride with a speed or effort, swimming, strength training, yoga …), a label from program.yaml's `activities:`, or any label with a `met` value")
            .found(format!("`{label}`"))
            .hint(format!(
                "nearest known labels: {near}; or teach the program the label: `activities: {{ \"{label}\": {{ compendium: \"17190\" }} }}` (a Compendium code) or `{{ met: 4.0 }}` in program.yaml; or {how}"
            )),
        );
    }
    diags.extend(more);
    note_identical_same_day(
        &rows,
        "activity rows",
        "are each counted in the day's total",
        ctx,
    );
    let rows = in_window(rows, w, true, &table, ctx, diags);
    table.describe(opts, ctx);

    let mut per_day: BTreeMap<NaiveDate, f64> = BTreeMap::new();
    for r in &rows {
        *per_day.entry(r.date).or_default() += r.value.1;
    }
    let mcol = table.column("minutes").or(table.column("end"));
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

/// An `attended` cell as attendance registers write it: `yes`/`no` and their short forms, and
/// the words of a register's export (`Present`/`Absent`, `Attended`/`Did not attend`, `DNA`,
/// `No-show`, a tick or a cross). Such rows were dropped as "unreadable attendance", so a
/// register exported as it comes lost every session. Case, `-`, `_` and spacing do not
/// matter. `None` for anything else (`excused`, a lone `x`, which registers use either way).
fn attendance_word(cell: &str) -> Option<bool> {
    let words: Vec<String> = cell
        .split(|ch: char| ch.is_whitespace() || ch == '-' || ch == '_')
        .filter(|w| !w.is_empty())
        .map(str::to_lowercase)
        .collect();
    match words.join(" ").as_str() {
        "yes" | "y" | "true" | "1" | "present" | "attended" | "✓" | "✔" => Some(true),
        "no" | "n" | "false" | "0" | "absent" | "did not attend" | "not attended" | "dna"
        | "no show" | "noshow" | "✗" | "✘" => Some(false),
        _ => None,
    }
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
    let rows = parse_rows(&table, ctx, opts, w, diags, |c, d| {
        let session = c.required_text("session", d)?;
        let a = c.required_text("attended", d)?;
        let attended = match attendance_word(&a) {
            Some(x) => x,
            None => {
                d.push(
                    c.warn("attended", "unreadable attendance; the row is dropped")
                        .expected(
                            "`yes` or `no` (also `present`, `attended`, `✓`; `absent`, \
                             `did not attend`, `DNA`, `no-show`, `✗`)",
                        )
                        .found(format!("`{a}`")),
                );
                return None;
            }
        };
        Some((session, attended))
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, true, &table, ctx, diags);
    table.describe(opts, ctx);
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

/// Units accepted per lab test, with the conversion to the canonical unit. HbA1c units may
/// carry the standard they are reported to, as laboratories that report both write them
/// (`% (NGSP)`, `% DCCT`, `mmol/mol (IFCC)`, `mmol/mol Hb`: IFCC–NGSP dual reporting, the 2007
/// consensus statement on HbA1c standardisation, Diabetes Care 30:2399, from memory); without
/// them a diabetes-range result was dropped with a warning and never reached the clinician's
/// flag. `mg/100 mL` is mg/dL (1 dL = 100 mL). The unit may also name the test (`%HbA1c`,
/// `% HbA1c`, `mmol/mol HbA1c`), or be the standard alone, as some laboratory systems export it:
/// `NGSP` (or `DCCT`) reports in %, `IFCC` in mmol/mol (same consensus statement, from memory);
/// those were dropped as units not accepted, so a diabetes-range value raised no flag.
fn lab_unit(test: LabTest, unit: &str) -> Option<fn(f64) -> f64> {
    let mut u = unit.to_lowercase().replace([' ', '(', ')'], "");
    if test == LabTest::Hba1c {
        for name in ["hba1c", "hb_a1c", "a1c"] {
            if let Some(rest) = u.strip_suffix(name).filter(|r| !r.is_empty()) {
                u = rest.to_string();
                break;
            }
        }
    }
    Some(match (test, u.as_str()) {
        (LabTest::FastingGlucose, "mmol/l") => |v| v,
        (LabTest::FastingGlucose, "mg/dl" | "mg/100ml") => glucose_mgdl_to_mmoll,
        (
            LabTest::Hba1c,
            "%" | "percent" | "%ngsp" | "%dcct" | "%dcct/ngsp" | "%ngsp/dcct" | "ngsp" | "dcct"
            | "dcct/ngsp" | "ngsp/dcct",
        ) => |v| v,
        (LabTest::Hba1c, "mmol/mol" | "mmol/molifcc" | "mmol/molhb" | "ifcc") => {
            hba1c_mmolmol_to_percent
        }
        (LabTest::Waist, "cm") => |v| v,
        (LabTest::Waist, "in" | "inch" | "inches" | "[in_i]") => |v| v * CM_PER_IN,
        (LabTest::SystolicBp | LabTest::DiastolicBp, "mmhg") => |v| v,
        // eGFR is per 1.73 m² of body surface by definition (KDIGO 2012); `mL/min` alone may
        // be a creatinine clearance, not normalised, and is not read as one.
        (
            LabTest::Egfr,
            "ml/min/1.73m2" | "ml/min/1.73m²" | "ml/min/1.73m^2" | "ml/min/{1.73_m2}"
            | "ml/min/1.73sqm" | "ml/min/1.73_m2" | "ml/min/1.73m*2",
        ) => |v| v,
        _ => return None,
    })
}

/// The accepted units of `test` ([`lab_unit`]) in which the unit-less number `text` is a
/// plausible value ([`lab_range`]). HbA1c `6.8` fits only `%` (6.8 mmol/mol is 2.8 %) and `52`
/// only `mmol/mol`; a fasting glucose of `5.9` fits only `mmol/L` and `131` only `mg/dL`; values
/// that fit two (glucose 18–40, HbA1c about 9–20, most waists) fit both and are not read.
fn lab_units_by_magnitude(test: LabTest, text: &str) -> Vec<&'static str> {
    let Ok(v) = text.trim().parse::<f64>() else {
        return Vec::new();
    };
    let units: &[&'static str] = match test {
        LabTest::FastingGlucose => &["mmol/L", "mg/dL"],
        LabTest::Hba1c => &["%", "mmol/mol"],
        LabTest::Waist => &["cm", "in"],
        LabTest::SystolicBp | LabTest::DiastolicBp => &["mmHg"],
        LabTest::Egfr => &["mL/min/1.73m2"],
    };
    let (lo, hi) = lab_range(test);
    units
        .iter()
        .copied()
        .filter(|u| v.is_finite() && lab_unit(test, u).is_some_and(|f| (lo..=hi).contains(&f(v))))
        .collect()
}

fn lab_units_text(test: LabTest) -> &'static str {
    match test {
        LabTest::FastingGlucose => "`mmol/L` or `mg/dL`",
        LabTest::Hba1c => "`%` or `mmol/mol`",
        LabTest::Waist => "`cm` or `in`",
        LabTest::SystolicBp | LabTest::DiastolicBp => "`mmHg`",
        LabTest::Egfr => "`mL/min/1.73m2`",
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
        LabTest::Egfr => (1.0, 200.0),
    }
}

/// What a lab row's `test` names: one test, or blood pressure written as `128/82`.
#[derive(Debug, Clone, Copy, PartialEq)]
enum LabName {
    One(LabTest),
    BloodPressure,
}

/// The usual spellings of each test (lowercase, other characters as `_`), or its LOINC code
/// (`4548-4`, as laboratory systems export it; [`super::loinc`]).
fn lab_name(name: &str) -> Option<LabName> {
    use super::loinc;
    let by_code = match name.trim() {
        loinc::HBA1C | loinc::HBA1C_IFCC => Some(LabName::One(LabTest::Hba1c)),
        loinc::FASTING_GLUCOSE_MASS | loinc::FASTING_GLUCOSE_MOLES => {
            Some(LabName::One(LabTest::FastingGlucose))
        }
        loinc::WAIST => Some(LabName::One(LabTest::Waist)),
        loinc::SYSTOLIC => Some(LabName::One(LabTest::SystolicBp)),
        loinc::DIASTOLIC => Some(LabName::One(LabTest::DiastolicBp)),
        loinc::BP_PANEL => Some(LabName::BloodPressure),
        code if loinc::EGFR.contains(&code) => Some(LabName::One(LabTest::Egfr)),
        _ => None,
    };
    if by_code.is_some() {
        return by_code;
    }
    let key = super::table::header_key(name).0;
    Some(match key.as_str() {
        "fasting_glucose"
        | "glucose_fasting"
        | "fasting_plasma_glucose"
        | "fpg"
        | "fasting_blood_glucose"
        | "fbg"
        | "fasting_blood_sugar"
        | "fbs"
        | "fasting_glucose_plasma" => LabName::One(LabTest::FastingGlucose),
        "hba1c"
        | "a1c"
        | "hb_a1c"
        | "hba1c_ifcc"
        | "hba1c_dcct"
        | "hemoglobin_a1c"
        | "haemoglobin_a1c"
        | "glycated_hemoglobin"
        | "glycated_haemoglobin"
        | "glycohemoglobin" => LabName::One(LabTest::Hba1c),
        "waist" | "waist_circumference" | "waist_circ" => LabName::One(LabTest::Waist),
        "systolic_bp" | "systolic" | "sbp" | "systolic_blood_pressure" | "bp_systolic" => {
            LabName::One(LabTest::SystolicBp)
        }
        "diastolic_bp" | "diastolic" | "dbp" | "diastolic_blood_pressure" | "bp_diastolic" => {
            LabName::One(LabTest::DiastolicBp)
        }
        "blood_pressure" | "bp" | "bloodpressure" => LabName::BloodPressure,
        "egfr"
        | "e_gfr"
        | "gfr"
        | "estimated_gfr"
        | "gfr_estimated"
        | "egfr_ckd_epi"
        | "egfr_mdrd"
        | "estimated_glomerular_filtration_rate"
        | "glomerular_filtration_rate" => LabName::One(LabTest::Egfr),
        _ => return None,
    })
}

/// Splits a censored lab value (`>14.0`, `> 14.0 %`, `>=14`, `≥ 14`, `<5.0`, `<= 5`) into its
/// qualifier and the rest; a value without one is returned whole.
fn split_censor(s: &str) -> (Option<Censor>, &str) {
    let t = s.trim_start();
    for sym in [">=", "<=", "≥", "≤", ">", "<"] {
        if let Some(rest) = t.strip_prefix(sym) {
            return (Censor::from_symbol(sym), rest.trim_start());
        }
    }
    (None, s)
}

/// Splits `5.7 %`, `128/82 mmHg` or `6,1 mmol/L` into the number part and the unit written
/// after it (if any).
fn split_value_unit(s: &str) -> (&str, Option<&str>) {
    // Numbers are cut whole (`1e400 %` is an out-of-range number, not 1 with a unit `e400 %`;
    // `NaN %` a number that is not finite), with `/`, signs and spaces between them.
    let mut end = 0;
    loop {
        let rest = &s[end..];
        let n = number_prefix_len(rest);
        if n > 0 {
            end += n;
            continue;
        }
        match rest.chars().next() {
            Some(c) if matches!(c, '/' | '-' | '+' | ' ') => end += c.len_utf8(),
            _ => break,
        }
    }
    let (num, unit) = s.split_at(end);
    let unit = unit.trim();
    (num.trim(), (!unit.is_empty()).then_some(unit))
}

impl SameValue for Vec<LabResult> {
    fn same_value(&self, o: &Self) -> bool {
        self.len() == o.len() && self.iter().zip(o).all(|(a, b)| a.same_value(b))
    }
}

/// Parses `labs.csv`, converting each value to its test's canonical unit. Tests may be written
/// in their usual spellings (`HbA1c`, `A1c`, `FPG`, `SBP`); a value may carry its unit
/// (`5.7 %`); blood pressure may be one row `blood_pressure` with `128/82` (mmHg).
pub fn parse_labs(
    text: &str,
    opts: &CsvOptions,
    ctx: &FileCtx,
    w: &Window,
    diags: &mut Vec<Diagnostic>,
) -> Option<Vec<LabResult>> {
    let table = read_table(text, &LABS, opts, ctx, diags)?;
    let rows = parse_rows(&table, ctx, opts, w, diags, |c, d| {
        let name = c.required_text("test", d)?;
        let Some(kind) = lab_name(&name) else {
            d.push(
                c.warn("test", "unknown test; the row is dropped")
                    .expected("one of fasting_glucose, hba1c, waist, systolic_bp, diastolic_bp, blood_pressure, egfr (usual spellings such as HbA1c, A1c, FPG, SBP/DBP, eGFR, and LOINC codes such as 4548-4, are read too)")
                    .found(format!("`{name}`")),
            );
            return None;
        };
        let raw = c.required_text("value", d)?;
        // `>14.0`, `> 14.0 %`, `>=14`, `<5.0`: a value beyond the assay's range, read as the
        // bound it is (`censored`), not as the number. A bound before a blood-pressure pair
        // (`>180/110`, as a monitor past its range or a record of a crisis writes it) bounds
        // both numbers, as it would each on a row of its own: systolic above 180, diastolic
        // above 110. It was dropped with a warning, and with it the severe-pressure flag on the
        // one reading most likely to need it; the flag reads each bound on its safe side
        // (`> 180` is above 180, `> 110` not known to be above 120).
        let (censored, value_text) = split_censor(&raw);
        let (num_text, unit_in_value) = split_value_unit(value_text);
        let unit = c
            .text("unit")
            .or(unit_in_value)
            .or(c.table.header_unit("value"))
            .map(str::to_string)
            .or_else(|| matches!(kind, LabName::BloodPressure).then(|| "mmHg".to_string()));
        // Without a unit, a value that only one accepted unit makes plausible is read in it,
        // with a warning: an HbA1c of `6.8` or a fasting glucose of `131` is in the diabetes
        // range and must reach the clinician's flag, not only the data-quality list.
        let unit = match (unit, kind) {
            (Some(u), _) => u,
            (None, LabName::One(test)) => {
                let plausible = lab_units_by_magnitude(test, num_text);
                if let [only] = plausible.as_slice() {
                    d.push(
                        c.warn("value", format!("no unit for `{name}`; read as {only}"))
                            .found(format!("`{raw}`"))
                            .expected(lab_units_text(test))
                            .hint(format!(
                                "{only} is the only accepted unit in which `{}` is a plausible \
                                 `{name}`; add a `unit` column, or write the unit with the value \
                                 (`5.7 %`)",
                                num_text.trim(),
                            )),
                    );
                    only.to_string()
                } else {
                    d.push(
                        c.warn("value", format!("no unit for `{name}`; the row is dropped"))
                            .found(format!("`{raw}`"))
                            .expected(lab_units_text(test))
                            .hint(if plausible.is_empty() {
                                "add a `unit` column, or write the unit with the value (`5.7 %`)"
                                    .to_string()
                            } else {
                                format!(
                                    "`{}` is plausible in {}: add a `unit` column, or write \
                                     the unit with the value (`5.7 %`)",
                                    num_text.trim(),
                                    plausible.join(" and in ")
                                )
                            }),
                    );
                    return None;
                }
            }
            (None, LabName::BloodPressure) => unreachable!("blood pressure defaults to mmHg"),
        };
        let parts: Vec<(LabTest, &str)> = match kind {
            // `abc` splits into no number and the "unit" `abc`: the message quotes the cell.
            LabName::One(t) if num_text.trim().is_empty() => vec![(t, value_text)],
            LabName::One(t) => vec![(t, num_text)],
            // A bound inside the pair (`180/>110`, `>180/>110`) or a number left out (`180/`):
            // the diastolic was "not a number", found `` (the bound had been read as a unit).
            LabName::BloodPressure
                if value_text.contains(['<', '>', '≤', '≥'])
                    || num_text
                        .split_once('/')
                        .is_some_and(|(s, d)| s.trim().is_empty() || d.trim().is_empty()) =>
            {
                d.push(
                    c.warn(
                        "value",
                        "blood pressure needs both numbers, with any bound before the pair; the row is dropped",
                    )
                    .expected("systolic/diastolic, e.g. `128/82`, or a bound before the pair, `>180/110`, which bounds both")
                    .found(format!("`{raw}`")),
                );
                return None;
            }
            LabName::BloodPressure => match num_text.split_once('/') {
                Some((sys, dia)) => vec![
                    (LabTest::SystolicBp, sys.trim()),
                    (LabTest::DiastolicBp, dia.trim()),
                ],
                None => {
                    d.push(
                        c.warn(
                            "value",
                            "blood pressure needs both numbers; the row is dropped",
                        )
                        .expected("systolic/diastolic, e.g. `128/82`")
                        .found(format!("`{raw}`")),
                    );
                    return None;
                }
            },
        };
        let mut out = Vec::with_capacity(parts.len());
        for (test, num) in parts {
            let value = c.parse_number("value", num, "the row is dropped", d)?;
            let Some(convert) = lab_unit(test, &unit) else {
                let mut w = c
                    .warn(
                        if c.text("unit").is_some() {
                            "unit"
                        } else {
                            "value"
                        },
                        format!("unit not accepted for `{name}`; the row is dropped"),
                    )
                    .expected(lab_units_text(test))
                    .found(format!("`{unit}`"));
                if c.text("unit").is_some()
                    && let Some(h) = c.split_text_before("unit")
                {
                    w = w.hint(h);
                }
                d.push(w);
                return None;
            };
            let canonical = convert(value);
            let (lo, hi) = lab_range(test);
            // `<0.5 mmol/L`, `<2.5 %`: an assay's lower limit below the range a value may
            // plausibly take. The bound is true whatever the value (it lies below a limit below
            // the range), so it is kept as the bound it is, as a `<` bound within the range is,
            // and raises no flag (no cut-off of ours lies below the range); it was dropped as
            // an implausible value, and with it the only record of the test.
            let low_bound = matches!(censored, Some(Censor::Below | Censor::AtMost));
            if low_bound && canonical < lo {
                d.push(
                    c.warn(
                        "value",
                        format!(
                            "`{name}` bound below the plausible range; kept as the bound it is \
                             ({} {} {}), with no flag",
                            censored.map_or("<", Censor::symbol),
                            num.trim(),
                            unit,
                        ),
                    )
                    .expected(format!("{lo} to {hi} {}", test.canonical_unit()))
                    .found(format!("`{raw}`"))
                    .hint("check the laboratory's report for the limit of the assay"),
                );
            } else if !(lo..=hi).contains(&canonical) {
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
            out.push(LabResult {
                date: NaiveDate::MIN,
                test,
                value: canonical,
                unit_as_written: unit.clone(),
                value_as_written: value,
                censored,
            });
        }
        if let [sys, dia] = out.as_slice()
            && sys.value <= dia.value
        {
            d.push(
                c.warn(
                    "value",
                    "systolic pressure not above diastolic; the row is dropped",
                )
                .expected("systolic/diastolic, e.g. `128/82`")
                .found(format!("`{raw}`")),
            );
            return None;
        }
        Some(out)
    });
    let rows = dedupe(rows, ctx, diags);
    let rows = in_window(rows, w, true, &table, ctx, diags);
    table.describe(opts, ctx);
    let mut out: Vec<LabResult> = rows
        .into_iter()
        .flat_map(|r| {
            let date = r.date;
            r.value.into_iter().map(move |l| LabResult { date, ..l })
        })
        .collect();
    out.sort_by_key(|l| (l.date, l.test));
    Some(out)
}

#[cfg(test)]
mod tests;

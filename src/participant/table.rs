//! Reading one CSV file into rows addressed by column name, with every problem of the file's
//! shape reported: missing or duplicate columns, extra columns, rows with the wrong number of
//! fields. Cell values are read by the helpers here so every message has the same form.
//!
//! Files are read as people's tools export them: the delimiter is recognised per file (comma,
//! semicolon or tab) unless `input.delimiter` fixes it; a decimal comma is read where the
//! delimiter is not a comma; dates may be date-times with or without a UTC offset; headers may
//! carry a unit (`Weight (lb)`) and may be mapped to our column names in program.yaml
//! (`input.columns`). Whatever was recognised rather than written our way is stated once per
//! file as a [`Note`].

use super::quantity::{NumberError, parse_decimal, parse_grouped};
use crate::diag::Diagnostic;
use crate::limits::{MAX_CSV_COLUMNS, MAX_CSV_FIELD_BYTES, MAX_CSV_FIELD_READ_BYTES, MAX_CSV_ROWS};
pub use crate::program::files::{FileSpec, LocalZone};
use chrono::{DateTime, Datelike, FixedOffset, NaiveDate, NaiveDateTime, NaiveTime, Offset};
use std::cell::{Cell, RefCell};
use std::collections::{BTreeMap, HashMap};
use std::sync::Arc;

/// Something the reader recognised or decided about a file that is not a problem (how it was
/// read, rows counted as written): shown by `check`, never counted as a warning.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct Note {
    /// Participant id.
    pub participant: String,
    /// File path relative to the program folder.
    pub file: String,
    /// What was recognised or decided.
    pub message: String,
}

/// Columns whose values are whole numbers in practice (energy, steps): a single `.` or `,`
/// followed by three digits there groups thousands (see [`parse_grouped`]).
const INTEGER_VALUED: [&str; 2] = ["kcal", "steps"];

/// Where diagnostics go: the participant and the file (relative to the program folder).
#[derive(Debug, Clone)]
pub struct FileCtx {
    /// Participant id.
    pub participant: String,
    /// File path relative to the program folder.
    pub file: String,
    /// Notes about how the file was read (see [`Note`]).
    pub notes: RefCell<Vec<Note>>,
    /// Data rows the table reader saw below the header, rows dropped for their shape
    /// included (not blank lines, repeated headers, date rows or summary rows): the
    /// `*_rows_in_file` of the tidy metrics.
    rows_in_file: Cell<usize>,
    /// Rows the file's parser kept at its end, by day, when it set them (see
    /// [`FileCtx::set_rows_used_by_day`]).
    rows_used_by_day: RefCell<Option<Vec<(NaiveDate, usize)>>>,
    /// The day the participant withdrew consent to the use of their data, when they did
    /// ([`FileCtx::with_consent_withdrawn`]): rows dated after it are not read.
    consent_withdrawn: Option<NaiveDate>,
}

impl FileCtx {
    /// A new context.
    pub fn new(participant: &str, file: impl Into<String>) -> Self {
        FileCtx {
            participant: participant.to_string(),
            file: file.into(),
            notes: RefCell::new(Vec::new()),
            rows_in_file: Cell::new(0),
            rows_used_by_day: RefCell::new(None),
            consent_withdrawn: None,
        }
    }

    /// This context for the file of someone who withdrew consent on `withdrew`.
    pub fn with_consent_withdrawn(mut self, withdrew: Option<NaiveDate>) -> Self {
        self.consent_withdrawn = withdrew;
        self
    }

    /// Whether a row the reader cannot take as a row (its shape is wrong) is dated after a
    /// withdrawal of consent: one of its cells reads as a date ([`parse_when`]) after it. Such a
    /// row is not read at all, as the parsers skip well-shaped rows after it: a warning about
    /// it would quote the person's data from after they withdrew (their weight, in
    /// data-quality.csv and the log), and would come back every month.
    fn after_consent(&self, rec: &csv::StringRecord, opts: &CsvOptions) -> bool {
        self.consent_withdrawn.is_some_and(|x| {
            rec.iter()
                .any(|f| parse_when(f, opts).is_some_and(|w| w.date > x))
        })
    }
    /// Counts one data row of the file (kept or dropped).
    pub fn count_row(&self) {
        self.rows_in_file.set(self.rows_in_file.get() + 1);
    }
    /// Takes back a row counted by [`FileCtx::count_row`] that sums up others (`Average`,
    /// a day's `Total`): no data row.
    pub fn uncount_row(&self) {
        self.rows_in_file
            .set(self.rows_in_file.get().saturating_sub(1));
    }
    /// Data rows counted so far.
    pub fn rows_in_file(&self) -> usize {
        self.rows_in_file.get()
    }
    /// Sets the rows the parser kept of each day, where they are not the records it returns
    /// (intake: its rows before the per-day sums).
    pub fn set_rows_used_by_day(&self, days: Vec<(NaiveDate, usize)>) {
        *self.rows_used_by_day.borrow_mut() = Some(days);
    }
    /// Rows the parser kept dated on or before `to` (every one when `None`), when it set them.
    pub fn rows_used_to(&self, to: Option<NaiveDate>) -> Option<usize> {
        self.rows_used_by_day.borrow().as_ref().map(|days| {
            days.iter()
                .filter(|(d, _)| to.is_none_or(|to| *d <= to))
                .map(|(_, n)| n)
                .sum()
        })
    }
    /// An error about this file.
    pub fn error(&self, message: impl Into<String>) -> Diagnostic {
        Diagnostic::error(&self.file, message).participant(&self.participant)
    }
    /// A warning about this file.
    pub fn warning(&self, message: impl Into<String>) -> Diagnostic {
        Diagnostic::warning(&self.file, message).participant(&self.participant)
    }
    /// Records a note about this file.
    pub fn note(&self, message: impl Into<String>) {
        self.notes.borrow_mut().push(Note {
            participant: self.participant.clone(),
            file: self.file.clone(),
            message: message.into(),
        });
    }
    /// The notes recorded so far.
    pub fn take_notes(&self) -> Vec<Note> {
        std::mem::take(&mut *self.notes.borrow_mut())
    }
}

/// Column-name mapping of one file kind: the header as written (normalised by
/// [`header_key`]) → our column name.
pub type ColumnMap = BTreeMap<String, String>;

/// How CSV files are read (from `program.yaml`'s `input:`).
#[derive(Debug, Clone)]
pub struct CsvOptions {
    /// Field delimiter; `None`: recognised per file (comma, semicolon or tab).
    pub delimiter: Option<u8>,
    /// chrono date format (may include a time and an offset).
    pub date_format: String,
    /// The participants' local time zone, for times stamped in UTC.
    pub time_zone: Option<LocalZone>,
    /// Column mappings by file kind (`weights`, `intake`, `activity`, `sessions`, `labs`).
    pub columns: Arc<BTreeMap<String, ColumnMap>>,
    /// The program's own activity labels.
    pub activities: Arc<crate::activities::LocalTable>,
    /// The program's first and last day, to tell which date system spreadsheet serial dates
    /// were written in (see [`SerialDates`]).
    pub program_span: Option<(NaiveDate, NaiveDate)>,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            delimiter: None,
            date_format: "%Y-%m-%d".into(),
            time_zone: None,
            columns: Arc::default(),
            activities: Arc::default(),
            program_span: None,
        }
    }
}

/// One data row.
#[derive(Debug, Clone)]
pub struct Row {
    /// 1-based line in the file.
    pub line: u64,
    /// Index of its first field in [`Table::bounds`].
    first: usize,
    /// Fields the row was written with, when fewer than the header's (the rest were read
    /// empty: values left off at the end, or one left out in the middle).
    short: Option<usize>,
}

/// A file's rows with its column positions.
///
/// Every field of every row is stored in one text buffer (`text`, with `bounds` giving each
/// field's byte range; a row's fields follow each other from the row's `first`): one allocation
/// per file instead of several per row, which matters when loading thousands of participants.
#[derive(Debug, Clone)]
pub struct Table {
    columns: BTreeMap<&'static str, usize>,
    /// Data rows with the header's number of fields.
    pub rows: Vec<Row>,
    /// 1-based line of the header row.
    pub header_line: u64,
    text: String,
    bounds: Vec<(usize, usize)>,
    /// Fields per row.
    width: usize,
    /// The field delimiter the file was read with.
    pub delimiter: u8,
    /// Whether the delimiter was recognised rather than set in program.yaml.
    sniffed: bool,
    /// Units written in the header, by our column name (lowercase, e.g. `lb`).
    units: BTreeMap<&'static str, String>,
    /// Columns whose unit in `units` was named by program.yaml's `input.columns`, not the header.
    units_from_program: std::collections::BTreeSet<&'static str>,
    /// Headers read as one of our columns under another name: (as written, our column).
    renamed: Vec<(String, &'static str)>,
    /// Each of our columns' header as written.
    headers: BTreeMap<&'static str, String>,
    /// Every column's header as written, in order (ours and the others).
    written: Vec<String>,
    /// Set when a number was read with a decimal comma.
    decimal_comma: Cell<bool>,
    /// The first number read with thousands separators, as written, and its value.
    thousands: RefCell<Option<(String, f64)>>,
    /// Set when a date carried a time of day.
    timestamps: Cell<bool>,
    /// Set when a UTC time was converted to the local time zone.
    utc_converted: Cell<bool>,
    /// Set when the date column's header says its times are UTC (`Date (UTC)`).
    dates_in_utc: bool,
    /// An activity's `start` and `end` columns (beside a date column) whose headers say
    /// their times are UTC (`Start Time (UTC)`).
    utc_spans: Vec<&'static str>,
    /// The date system of the file's spreadsheet serial dates, with the first one read (as
    /// written, and its date), when it has any.
    serial_dates: Option<(SerialDates, String, NaiveDate)>,
    /// The order of the file's numeric dates (`13/05/2026`), when it has any and the program
    /// sets no format, with the file's own date that tells it (as written, and its date).
    numeric_order: Option<NumericOrder>,
    numeric_example: Option<(String, NaiveDate)>,
    /// How many of the file's numeric dates read only the other way round from its order
    /// (each costs its row, with a warning).
    numeric_against: usize,
    /// When dates come from date rows above the measurements: the field of the time of day,
    /// which messages about a row's date point at.
    date_rows_in: Option<usize>,
    /// Rows with a summary label where the date would be (`Average`): how many, and the first.
    summary_rows: RefCell<(usize, Option<(u64, String)>)>,
    /// Rows with a date and nothing recorded (see [`Table::is_unfilled`]): how many, and the
    /// first one's line.
    unfilled_rows: Cell<(usize, u64)>,
    /// An activity file's rows that give only a step count (see [`Table::is_step_count`]):
    /// how many, and the first one's line.
    step_count_rows: Cell<(usize, u64)>,
    /// Columns not ours found to hold words of their own (see [`Table::column_of_words`]),
    /// by field index, as first worked out.
    words_columns: RefCell<BTreeMap<usize, bool>>,
    /// Forms of values recognised in the cells (`weights with their unit in the cell`), for
    /// the file's note.
    recognised: RefCell<std::collections::BTreeSet<std::borrow::Cow<'static, str>>>,
    /// Rows the reader dropped for their shape (a field too many or too few, a field over the
    /// size limit, a row the CSV reader could not read), each with its warning: how many, and
    /// the first one's warning. They never reach [`Table::rows`].
    pub dropped: (usize, Option<Diagnostic>),
}

/// Adds `row` to a tally of rows left out for a file's note: how many, and the first line.
fn count_row(tally: &Cell<(usize, u64)>, row: &Row) {
    let (n, first) = tally.get();
    let first = if n == 0 {
        row.line
    } else {
        first.min(row.line)
    };
    tally.set((n + 1, first));
}
impl Table {
    /// 1-based field number of `col` (for diagnostics), when the file has it.
    pub fn column(&self, col: &str) -> Option<u64> {
        match self.date_rows_in {
            Some(t) if col == "date" => Some(t as u64 + 1),
            _ => self.columns.get(col).map(|&i| i as u64 + 1),
        }
    }

    /// The trimmed text of `col` in `row`; `None` when the column is absent or the cell empty.
    pub fn get<'t>(&'t self, row: &Row, col: &str) -> Option<&'t str> {
        let i = *self.columns.get(col)?;
        self.field(row, i)
    }

    /// Whether `row` records nothing but its day: every cell other than the date, time, unit
    /// and source is empty or holds only a placeholder (`-`, `N/A`, `null`), as a log sheet
    /// with its days written in ahead leaves the days not (yet) filled in. Such a row is no
    /// measurement and no mistake: it was warned about as "`weight` is empty", one warning
    /// per blank day, so a filled-in sheet ended every run with warnings.
    pub fn is_unfilled(&self, row: &Row) -> bool {
        if self.date_rows_in.is_some() {
            return false;
        }
        // (An array, not a Vec: this runs for every row of every file.)
        let kept = ["date", "time", "unit", "source"].map(|c| self.columns.get(c).copied());
        let mut others = (0..self.width)
            .filter(|i| !kept.contains(&Some(*i)))
            .peekable();
        others.peek().is_some() && others.all(|i| self.field(row, i).is_none_or(is_placeholder))
    }

    /// Counts `row` as one with nothing recorded, for the file's note.
    pub fn unfilled_row(&self, row: &Row) {
        count_row(&self.unfilled_rows, row);
    }

    /// Whether `row` of an activity file gives a step count and no activity: its `steps` holds
    /// a value while its `activity`, `minutes`, `met` and `end` are empty or placeholders, as a
    /// phone's export lists each day's steps in a row of its own beside the day's workouts.
    pub fn is_step_count(&self, row: &Row) -> bool {
        let blank = |c: &str| self.get(row, c).is_none_or(is_placeholder);
        self.get(row, "steps").is_some_and(|s| !is_placeholder(s))
            && ["activity", "minutes", "met", "end"].into_iter().all(blank)
    }

    /// Whether `row` of an activity file names an activity or a duration (a workout, even one
    /// whose other values fail).
    pub fn gives_workout(&self, row: &Row) -> bool {
        ["activity", "minutes"]
            .into_iter()
            .any(|c| self.get(row, c).is_some_and(|s| !is_placeholder(s)))
    }

    /// Counts `row` as one that gives only a step count, for the file's note.
    pub fn step_count_row(&self, row: &Row) {
        count_row(&self.step_count_rows, row);
    }

    /// Field `i` of `row` as written, spaces included.
    fn raw_field<'t>(&'t self, row: &Row, i: usize) -> Option<&'t str> {
        let (a, b) = *self.bounds.get(row.first + i)?;
        Some(&self.text[a..b])
    }

    fn field<'t>(&'t self, row: &Row, i: usize) -> Option<&'t str> {
        let (a, b) = *self.bounds.get(row.first + i)?;
        let s = self.text[a..b].trim();
        (!s.is_empty()).then_some(s)
    }

    /// `row`'s fields joined by the file's delimiter, each trimmed, the whole cut to 200
    /// characters: the row as a message quotes it.
    pub fn row_text(&self, row: &Row) -> String {
        let delimiter = char::from(self.delimiter).to_string();
        let fields: Vec<&str> = (0..self.width)
            .map_while(|i| self.raw_field(row, i).map(str::trim))
            .collect();
        shorten(&fields.join(&delimiter), 200)
    }

    /// The header of `col` as written, when it was read under another name (`Energy` for
    /// `kcal`).
    pub fn written_as(&self, col: &str) -> Option<&str> {
        self.renamed
            .iter()
            .find(|(_, c)| *c == col)
            .map(|(w, _)| w.as_str())
    }

    /// Records a form of value recognised in the cells, stated once in the file's note.
    pub fn recognised(&self, what: impl Into<std::borrow::Cow<'static, str>>) {
        self.recognised.borrow_mut().insert(what.into());
    }

    /// The header of `col` as written (`Weight (kg)`).
    pub fn written_header(&self, col: &str) -> Option<&str> {
        self.headers.get(col).map(String::as_str)
    }

    /// The unit written in the header of `col` (`Weight (lb)` → `lb`), lowercase.
    pub fn header_unit(&self, col: &str) -> Option<&str> {
        self.units.get(col).map(String::as_str)
    }

    /// The header of column `col` as the file writes it (`Duration`).
    pub fn header_written(&self, col: &str) -> Option<&str> {
        self.headers.get(col).map(String::as_str)
    }

    /// Notes that a row's time of day was a UTC time, converted to the local time zone (the
    /// file's note says so, as for dates with UTC times).
    pub fn note_utc_converted(&self) {
        self.timestamps.set(true);
        self.utc_converted.set(true);
    }

    /// Whether the header of an activity's `start` or `end` column (beside a date column) says
    /// its times are UTC (`Start Time (UTC)`, `End (GMT)`), as `Date (UTC)` does for a date.
    pub fn span_in_utc(&self, col: &str) -> bool {
        self.utc_spans.contains(&col)
    }

    /// Whether a field of `row` outside our columns (a `Meal` column, say) holds one of
    /// `labels` (lowercase), whatever its case, spacing or final colon (`TOTAL:`).
    pub fn row_labelled(&self, row: &Row, labels: &[&str]) -> bool {
        self.row_label(row, labels).is_some()
    }

    /// The first field of `row` outside our columns that holds one of `labels` (see
    /// [`Table::row_labelled`]).
    pub fn row_label<'t>(&'t self, row: &Row, labels: &[&str]) -> Option<&'t str> {
        // A unit column's `min` is minutes, not a row's minimum: every activity row of a
        // `Duration,Unit` export in minutes was left out as a summary row.
        (0..self.width)
            .filter(|i| !self.columns.values().any(|c| c == i))
            .filter(|&i| {
                !self
                    .written
                    .get(i)
                    .is_some_and(|h| UNIT_COLUMNS.contains(&header_key(h).0.as_str()))
            })
            .filter_map(|i| self.field(row, i).map(|f| (i, f)))
            .find(|&(i, f)| {
                is_label(f, labels) && !(is_label(f, &EXTREME_LABELS) && self.column_of_words(i))
            })
            .map(|(_, f)| f)
    }

    /// Whether column `i` holds, in some row, a word that is no summary label and no number
    /// (`Low`, `Moderate` beside `Max` in an `Intensity` column): a column of values of its
    /// own, in which `Max` or `Min` is a value (an effort), not a row's maximum. Every `Max`
    /// workout of such an export was left out as a summary row, with a note only.
    fn column_of_words(&self, i: usize) -> bool {
        if let Some(&w) = self.words_columns.borrow().get(&i) {
            return w;
        }
        let w = self.rows.iter().filter_map(|r| self.field(r, i)).any(|f| {
            f.chars().any(char::is_alphabetic)
                && !is_label(f, &SUMMARY_LABELS)
                && !is_summary_date(f)
        });
        self.words_columns.borrow_mut().insert(i, w);
        w
    }

    /// The cell of `row` in a column the file's spec does not read whose header is one of
    /// `keys` (as [`header_key`] reads it): an intake file's `Unit` column beside its energy.
    pub fn unread_cell<'t>(&'t self, row: &Row, keys: &[&str]) -> Option<&'t str> {
        let i = (0..self.width)
            .filter(|i| !self.columns.values().any(|c| c == i))
            .find(|&i| {
                self.written
                    .get(i)
                    .is_some_and(|h| keys.contains(&header_key(h).0.as_str()))
            })?;
        self.field(row, i)
    }

    /// Whether rows `a` and `b` hold the same text in every field.
    pub fn same_row(&self, a: &Row, b: &Row) -> bool {
        (0..self.width).all(|i| self.field(a, i) == self.field(b, i))
    }

    /// Whether the row holds a time of day (a `time` column or a date-time).
    fn row_has_time(&self, row: &Row) -> bool {
        self.get(row, "time").is_some() || self.get(row, "date").is_some_and(|d| d.contains(':'))
    }

    fn row_hash(&self, row: &Row) -> u64 {
        use std::hash::{Hash, Hasher};
        let mut h = std::collections::hash_map::DefaultHasher::new();
        for i in 0..self.width {
            self.field(row, i).unwrap_or("").hash(&mut h);
        }
        h.finish()
    }

    fn empty(delimiter: u8, sniffed: bool) -> Table {
        Table {
            columns: BTreeMap::new(),
            rows: Vec::new(),
            header_line: 1,
            text: String::new(),
            bounds: Vec::new(),
            width: 0,
            delimiter,
            sniffed,
            units: BTreeMap::new(),
            units_from_program: Default::default(),
            renamed: Vec::new(),
            headers: BTreeMap::new(),
            written: Vec::new(),
            decimal_comma: Cell::new(false),
            thousands: RefCell::default(),
            timestamps: Cell::new(false),
            utc_converted: Cell::new(false),
            dates_in_utc: false,
            utc_spans: Vec::new(),
            serial_dates: None,
            numeric_order: None,
            numeric_against: 0,
            numeric_example: None,
            date_rows_in: None,
            summary_rows: RefCell::new((0, None)),
            unfilled_rows: Cell::new((0, 0)),
            step_count_rows: Cell::new((0, 0)),
            words_columns: RefCell::new(BTreeMap::new()),
            recognised: RefCell::default(),
            dropped: (0, None),
        }
    }

    /// States once, as a note on the file, whatever was recognised rather than written our
    /// way: the delimiter, decimal commas, date-times, renamed columns and header units.
    pub fn describe(&self, opts: &CsvOptions, ctx: &FileCtx) {
        let mut parts = Vec::new();
        let mut how = String::new();
        if self.sniffed && self.delimiter != b',' {
            how.push_str(match self.delimiter {
                b';' => "semicolon-separated",
                b'\t' => "tab-separated",
                _ => "separated by an unusual character",
            });
        }
        if self.decimal_comma.get() {
            if how.is_empty() {
                how.push_str("numbers");
            }
            how.push_str(" with decimal commas");
        }
        if !how.is_empty() {
            parts.push(format!("read as {how}"));
        }
        // The file's own example (a fixed `1.850` was quoted to a file that wrote `1,191`).
        if let Some((written, value)) = &*self.thousands.borrow() {
            parts.push(format!(
                "numbers with thousands separators read as whole thousands (`{written}` = {value})"
            ));
        }
        if self.timestamps.get() {
            let mut s =
                "dates given with a time of day (each row counts on the local day it was measured"
                    .to_string();
            if self.utc_converted.get() {
                match &opts.time_zone {
                    Some(z) => s.push_str(&format!("; UTC times converted to {}", z.name())),
                    None => s.push_str("; UTC times taken on their UTC day: set `input.time_zone` for the participants' local day"),
                }
            }
            s.push(')');
            parts.push(s);
        }
        if let Some((system, example, date)) = &self.serial_dates {
            parts.push(format!(
                "dates written as spreadsheet serial numbers read in the {} date system, the only one that puts them within the program (`{example}` = {date})",
                system.name()
            ));
        }
        parts.extend(self.recognised.borrow().iter().map(|w| w.to_string()));
        // The file's own date that tells the order (a fixed example such as `05/13/2026` read
        // as if the file held it).
        if let (Some(order), Some((written, date))) = (self.numeric_order, &self.numeric_example) {
            let only = match (order, self.numeric_against) {
                (NumericOrder::YearFirst, _) => {
                    "the only order that puts every date of the file within the program".to_string()
                }
                (_, 0) => "the only order that reads every date of the file".to_string(),
                (_, 1) => "the order of all the file's dates but one, which reads only the other way round (dropped with a warning)".to_string(),
                (_, n) => format!("the order of all the file's dates but {n}, which read only the other way round (each dropped with a warning)"),
            };
            parts.push(format!(
                "numeric dates read {} (`{written}` = {date}), {only}",
                order.words()
            ));
        }
        if let (n, Some((line, label))) = &*self.summary_rows.borrow() {
            let rows = if *n == 1 {
                "1 row"
            } else {
                &format!("{n} rows")
            };
            parts.push(format!(
                "{rows} summing up the others (`{label}` on line {line}) left out: not measurements"
            ));
        }
        if let (n @ 1.., line) = self.unfilled_rows.get() {
            let rows = if n == 1 {
                "1 row".to_string()
            } else {
                format!("{n} rows")
            };
            parts.push(format!(
                "{rows} with a date and nothing recorded (first on line {line}; the days a log \
                 sheet leaves blank) not read"
            ));
        }
        if let (n @ 1.., line) = self.step_count_rows.get() {
            let rows = if n == 1 {
                "1 row".to_string()
            } else {
                format!("{n} rows")
            };
            parts.push(format!(
                "{rows} giving only a step count (first on line {line}) not read: steps alone give \
                 no activity minutes (an activity and its duration are read, with the steps beside them)"
            ));
        }
        for (written, col) in &self.renamed {
            parts.push(format!("column `{written}` read as `{col}`"));
        }
        for (col, unit) in &self.units {
            // Units are kept lowercase for matching; the note writes them as people do
            // ("`kcal` in kj" read as if kilojoules were a misspelt kcal).
            let (unit, then) = match unit.as_str() {
                "kj" => ("kJ", ", converted to kcal at 4.184 kJ/kcal"),
                "mmol/l" => ("mmol/L", ""),
                "mg/dl" => ("mg/dL", ""),
                u => (u, ""),
            };
            let from = if self.units_from_program.contains(col) {
                "from program.yaml's `input.columns`"
            } else {
                "from the header"
            };
            parts.push(format!("`{col}` in {unit} ({from}){then}"));
        }
        if !parts.is_empty() {
            ctx.note(parts.join("; "));
        }
    }

    /// Rows that repeat earlier rows on strong evidence: identical in every field and holding
    /// a time of day, or part of a block of at least [`REPEATED_BLOCK_ROWS`] consecutive rows
    /// that repeats an earlier block. Returns, per row, the line of the row it repeats.
    pub fn repeated_rows(&self) -> Vec<Option<u64>> {
        let n = self.rows.len();
        let mut dup: Vec<Option<u64>> = vec![None; n];
        let hashes: Vec<u64> = self.rows.iter().map(|r| self.row_hash(r)).collect();
        let mut seen: HashMap<u64, Vec<usize>> = HashMap::with_capacity(n);
        let mut i = 0;
        while i < n {
            if dup[i].is_some() {
                i += 1;
                continue;
            }
            let earlier = seen.get(&hashes[i]).cloned().unwrap_or_default();
            let mut longest = (0usize, 0usize); // (block length, start of the earlier block)
            for &j in earlier.iter().take(8) {
                if !self.same_row(&self.rows[j], &self.rows[i]) {
                    continue;
                }
                let mut len = 1;
                while i + len < n
                    && j + len < i
                    && hashes[j + len] == hashes[i + len]
                    && self.same_row(&self.rows[j + len], &self.rows[i + len])
                {
                    len += 1;
                }
                if len > longest.0 {
                    longest = (len, j);
                }
            }
            let (len, j) = longest;
            // A block of one row over and over is no evidence of a paste: six identical
            // `2026-04-01,Coffee,40` rows (six coffees, no time) had their last three dropped
            // as "repeating" the first three, while two to five such rows all counted. Such a
            // run is left to the rule for identical rows (counted without a time).
            let one_row_repeated = (1..len).all(|k| {
                hashes[i + k] == hashes[i] && self.same_row(&self.rows[i + k], &self.rows[i])
            });
            if len >= REPEATED_BLOCK_ROWS && !one_row_repeated {
                for k in 0..len {
                    dup[i + k] = Some(self.rows[j + k].line);
                }
                i += len;
                continue;
            }
            if len >= 1 && self.row_has_time(&self.rows[i]) {
                dup[i] = Some(self.rows[j].line);
            } else {
                seen.entry(hashes[i]).or_default().push(i);
            }
            i += 1;
        }
        dup
    }
}

/// Whether a cell holds only a placeholder for "no value" (`-`, `–`, `—`, `N/A`, `NA`, `null`,
/// `none`), as spreadsheets and database exports write an empty cell (common practice).
fn is_placeholder(s: &str) -> bool {
    matches!(s, "-" | "–" | "—")
        || ["n/a", "na", "null", "none"]
            .iter()
            .any(|p| s.eq_ignore_ascii_case(p))
}

/// The inside of a cell a spreadsheet wrote as a text formula, `="2026-04-10"` (in a CSV file
/// also `"=""2026-04-10"""`, the same cell once unquoted), so that the text is kept as written
/// (a date not turned into a serial number, a leading zero kept); `None` for any other cell.
/// Such a date was "unreadable" and its row dropped. A quote inside is written twice.
fn spreadsheet_text(cell: &str) -> Option<String> {
    let inside = cell.trim().strip_prefix("=\"")?.strip_suffix('"')?;
    let unescaped = inside.replace("\"\"", "\"");
    (unescaped.matches('"').count() * 2 == inside.matches('"').count()).then_some(unescaped)
}

/// Headers (as [`header_key`] reads them) of a column that gives the unit of each row's value
/// beside it (`Date;Energy;Unit`, `Date,Activity,Duration,Unit`): not one of `intake.csv`'s or
/// `activity.csv`'s columns, read by `parse_intake` and `parse_activity` where its cells are
/// units of energy or of time. Its cells are never summary labels: `min` there is minutes.
pub const UNIT_COLUMNS: &[&str] = &["unit", "units", "energy_unit", "duration_unit", "einheit"];

/// Consecutive identical rows that make a repeated block (a file pasted twice): fewer could be
/// the same meal or walk on the same days by chance (common practice).
pub const REPEATED_BLOCK_ROWS: usize = 3;

pub use crate::program::files::header_key;

/// Picks the field delimiter of a file: of comma, semicolon and tab, the one that splits the
/// first line into the most fields and splits the next lines (up to 20) into as many. `None`
/// when the file has no line with any of them (one column: comma is as good as any).
pub fn sniff_delimiter(text: &str) -> Option<u8> {
    // Lines end with `\n`, `\r\n` or a lone `\r` (`str::lines` knows only the first two).
    let lines: Vec<&str> = text
        .split(['\n', '\r'])
        .filter(|l| !l.trim().is_empty())
        .take(21)
        .collect();
    let first = lines.first()?;
    let count = |line: &str, d: u8| -> usize {
        let mut quoted = false;
        line.bytes()
            .filter(|&b| {
                if b == b'"' {
                    quoted = !quoted;
                }
                !quoted && b == d
            })
            .count()
    };
    let mut best: Option<(usize, usize, u8)> = None; // (consistent lines, fields, delimiter)
    for d in [b',', b';', b'\t'] {
        let n = count(first, d);
        if n == 0 {
            continue;
        }
        let consistent = lines[1..].iter().filter(|l| count(l, d) == n).count();
        let cand = (consistent, n, d);
        // More consistent lines first, then more fields; comma wins ties (it comes first).
        if best.is_none_or(|b| (cand.0, cand.1) > (b.0, b.1)) {
            best = Some(cand);
        }
    }
    best.map(|b| b.2)
}

/// The records of `text` below its first line that hold a value (quoted line breaks kept in
/// their record): the data rows of a file refused at its header, which the table reader never
/// reached. Title lines above the header, if any, are counted among them.
pub fn records_below_first_line(text: &str) -> usize {
    let mut reader = csv::ReaderBuilder::new()
        .has_headers(true)
        .flexible(true)
        .from_reader(text.as_bytes());
    reader
        .records()
        .take(MAX_CSV_ROWS + 1)
        .filter(|r| {
            r.as_ref()
                .is_ok_and(|r| r.iter().any(|f| !f.trim().is_empty()))
        })
        .count()
}

/// Reads `text` as a CSV file of kind `spec`. Returns `None` (with an error pushed) when the
/// file cannot be used; an empty or header-only file gives a table without rows.
pub fn read_table(
    text: &str,
    spec: &FileSpec,
    opts: &CsvOptions,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Option<Table> {
    let text = text.strip_prefix('\u{feff}').unwrap_or(text);
    // Byte-order marks at the start of lines: exports joined together (`cat a.csv b.csv`, or a
    // UTF-16 file appended to another), each saved with its own mark. Invisible, the mark made
    // the second export's header "the header of another export" (the file refused) and a row's
    // date unreadable; it is not read, with a note.
    let unmarked;
    let text = match line_start_marks(text) {
        Some((count, first)) => {
            unmarked = text.replace("\n\u{feff}", "\n").replace("\r\u{feff}", "\r");
            ctx.note(if count == 1 {
                format!(
                    "a byte-order mark (U+FEFF) at the start of line {first} is not read: files \
                     joined together, each saved with its own mark"
                )
            } else {
                format!(
                    "byte-order marks (U+FEFF) at the start of {} lines (the first on line \
                     {first}) are not read: files joined together, each saved with its own mark",
                    crate::diag::thousands(count)
                )
            });
            unmarked.as_str()
        }
        None => text,
    };
    // Zero bytes at the end: what a save or a copy cut off by a crash or a power cut leaves
    // (the file's length was kept, its last blocks never written). They were read as a row
    // of one long field, "check for a quote that is never closed", and the rows that were
    // lost went unmentioned.
    let kept = text.trim_end_matches('\0');
    if kept.len() < text.len() {
        let zeros = text.len() - kept.len();
        diags.push(
            ctx.warning(format!(
                "the file ends with {zeros} zero bytes, which are not read: what a save or a \
                 copy stopped by a crash or a power cut leaves; rows after line {} may be missing",
                line_at(kept.as_bytes(), kept.len()).saturating_sub(1).max(1)
            ))
            .at(line_at(kept.as_bytes(), kept.len()), None)
            .expected("text up to the end of the file")
            .found(format!("{zeros} zero bytes (0x00)"))
            .hint("compare the file with the system or app it came from, and export it again if rows are missing"),
        );
    }
    let text = kept;
    let (delimiter, sniffed) = match (sep_line(text), opts.delimiter) {
        (Some(d), _) | (None, Some(d)) => (d, false),
        (None, None) => (
            sniff_below_preamble(text, spec, opts)
                .or_else(|| sniff_delimiter(text))
                .unwrap_or(b','),
            true,
        ),
    };
    // Before the reader sees it: the reader gathers a field whole (and a copy of the text)
    // before anything can judge it, so a field of megabytes cost several times its size.
    if let Some(f) = overlong_field(text, delimiter) {
        let hint = if f.quoted {
            "a quote (`\"`) opened at the start of this field is never closed (or closed far \
             below): every line after it was read into this one field; close the quote, or \
             remove it"
        } else {
            "check it is the right file, saved with line ends, and with its fields separated \
             by commas, semicolons or tabs"
        };
        diags.push(
            ctx.error(format!(
                "a field of {} bytes starts here, longer than the limit of {} for one field; \
                 the file cannot be used",
                f.bytes,
                crate::limits::human(MAX_CSV_FIELD_READ_BYTES as u64)
            ))
            .at(f.line, Some(f.column))
            .expected(format!(
                "fields of at most {MAX_CSV_FIELD_BYTES} bytes (a date, a number, a unit or a \
                 short note; a longer field costs its row, one over {} the file)",
                crate::limits::human(MAX_CSV_FIELD_READ_BYTES as u64)
            ))
            .found(format!(
                "`{}…`",
                f.start.replace('\n', "\\n").replace('\r', "\\r")
            ))
            .hint(hint),
        );
        return None;
    }
    with_reader(delimiter, text, |reader| {
        let file = FileRead {
            text,
            spec,
            opts,
            delimiter,
            sniffed,
            ctx,
        };
        read_records(reader, &file, diags)
    })
    .and_then(|mut table| {
        if let Some(d) =
            day_month_swapped(&table, opts, ctx).or_else(|| dotted_month_first(&table, opts, ctx))
        {
            diags.push(d);
            return None;
        }
        match serial_dates(&table, opts, ctx)
            .and_then(|serial| numeric_order(&table, opts, ctx).map(|order| (serial, order)))
        {
            Ok((serial, order)) => {
                table.serial_dates = serial;
                table.numeric_order = order.as_ref().map(|(o, ..)| *o);
                table.numeric_against = order.as_ref().map_or(0, |(.., n)| *n);
                table.numeric_example = order.and_then(|(_, example, _)| example);
                Some(table)
            }
            Err(d) => {
                diags.push(*d);
                None
            }
        }
    })
}

/// The two date systems of spreadsheet serial dates (ECMA-376, "Date Representation": the
/// 1900 and the 1904 date base systems; Part 1 §18.17.4, the section number from memory). A
/// workbook counts days from one or the other; its CSV export writes the count alone when a
/// date cell is not formatted as a date, and does not say which system.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SerialDates {
    /// Serial 1 is 1 January 1900, and 1900 is treated as a leap year, so from serial 61
    /// (1 March 1900) on, serial n is n days after 30 December 1899 (the default system).
    From1900,
    /// Serial 0 is 1 January 1904 (older Mac workbooks): 1,462 days after the 1900 system.
    From1904,
}

impl SerialDates {
    fn name(self) -> &'static str {
        match self {
            SerialDates::From1900 => "1900",
            SerialDates::From1904 => "1904",
        }
    }

    /// The date and time of `serial` (a whole number of days and a fraction of a day), when it
    /// is a date after February 1900 in this system (and not beyond the systems' last day,
    /// 31 December 9999).
    pub fn date_time(self, serial: f64) -> Option<NaiveDateTime> {
        let (base, first) = match self {
            SerialDates::From1900 => (NaiveDate::from_ymd_opt(1899, 12, 30)?, 61.0),
            SerialDates::From1904 => (NaiveDate::from_ymd_opt(1904, 1, 1)?, 0.0),
        };
        if !(first..3_000_000.0).contains(&serial) {
            return None;
        }
        let days = serial.floor();
        // To the second: a time of day is stored as a fraction of 86,400 seconds.
        let seconds = ((serial - days) * 86_400.0).round() as i64;
        let dt = base.and_hms_opt(0, 0, 0)?
            + chrono::Duration::days(days as i64)
            + chrono::Duration::seconds(seconds);
        (dt.year() <= 9999).then_some(dt)
    }
}

/// Days either side of the program within which serial dates must fall for their date system
/// to be taken: data from screening before the start or follow-up after the end still fit,
/// and the two systems' readings (1,462 days apart) cannot both fit a program of up to two
/// years (common practice).
pub const SERIAL_DATE_MARGIN_DAYS: i64 = 365;

/// Whether `s` is written as a spreadsheet serial date: digits, and a fraction of a day after
/// a decimal point or a decimal comma (`46297,27153`, as a spreadsheet of a decimal-comma locale
/// writes an unformatted date-time cell; five digits before it cannot be thousands grouped).
fn is_serial(s: &str) -> bool {
    serial_number(s).is_some()
}

/// The number a spreadsheet serial date (see [`is_serial`]) is written as.
fn serial_number(s: &str) -> Option<f64> {
    let (int, frac) = s.split_once(['.', ',']).unwrap_or((s, "0"));
    // Five digits: 10000 to 99999 are the years 1927 to 2177 across the two systems.
    let serial = int.len() == 5
        && !frac.is_empty()
        && int.bytes().all(|b| b.is_ascii_digit())
        && frac.bytes().all(|b| b.is_ascii_digit());
    serial.then(|| format!("{int}.{frac}").parse().ok())?
}

/// The date system of a file's spreadsheet serial dates (`46143` for 1 May 2026): the one
/// system that puts every one of them within the program (give or take
/// [`SERIAL_DATE_MARGIN_DAYS`]). When both or neither do, the file is refused at the first
/// serial date: read in the wrong system every date would be four years off.
fn serial_dates(
    table: &Table,
    opts: &CsvOptions,
    ctx: &FileCtx,
) -> Result<Option<(SerialDates, String, NaiveDate)>, Box<Diagnostic>> {
    let serials: Vec<(&Row, &str)> = table
        .rows
        .iter()
        .filter_map(|r| table.get(r, "date").map(|s| (r, s)))
        .filter(|(_, s)| is_serial(s) && parse_when(s, opts).is_none())
        .collect();
    let Some(&(first_row, first)) = serials.first() else {
        return Ok(None);
    };
    let margin = chrono::Duration::days(SERIAL_DATE_MARGIN_DAYS);
    let fits = |system: SerialDates| {
        opts.program_span.is_some_and(|(start, end)| {
            serials.iter().all(|(_, s)| {
                serial_number(s)
                    .and_then(|v| system.date_time(v))
                    .is_some_and(|dt| dt.date() >= start - margin && dt.date() <= end + margin)
            })
        })
    };
    let fitting: Vec<SerialDates> = [SerialDates::From1900, SerialDates::From1904]
        .into_iter()
        .filter(|&s| fits(s))
        .collect();
    let reading = |system: SerialDates| {
        serial_number(first)
            .and_then(|v| system.date_time(v))
            .map_or("no date".to_string(), |dt| dt.date().to_string())
    };
    // Among other dates, a serial date that cannot be placed is warned about on its own row.
    let dated = table
        .rows
        .iter()
        .filter(|r| table.get(r, "date").is_some())
        .count();
    if fitting.len() != 1 && serials.len() < dated {
        return Ok(None);
    }
    if let [system] = fitting.as_slice() {
        let date = serial_number(first)
            .and_then(|v| system.date_time(v))
            .expect("it fits")
            .date();
        return Ok(Some((*system, first.to_string(), date)));
    }
    let span = match opts.program_span {
        Some((a, b)) => {
            format!("the program ({a} to {b}, give or take {SERIAL_DATE_MARGIN_DAYS} days)")
        }
        None => "the program".to_string(),
    };
    let why = if fitting.is_empty() {
        format!("neither system puts every serial date of the file within {span}")
    } else {
        format!("both systems put every serial date of the file within {span}")
    };
    Err(Box::new(ctx
        .error(format!(
            "the dates are spreadsheet serial numbers (`{first}` is {} in the 1900 date system, {} in the 1904 one) and {why}, so which date each stands for cannot be told; the file is not used",
            reading(SerialDates::From1900),
            reading(SerialDates::From1904)
        ))
        .at(first_row.line, table.column("date"))
        .field("date")
        .expected("dates such as `2026-05-01`, or serial numbers that fall within the program in one date system only")
        .found(format!("`{first}`"))
        .hint("in the spreadsheet, format the date column as dates (e.g. yyyy-mm-dd) and save the CSV again")))
}

/// A file whose dates are written with day and month the other way round from
/// `input.date_format` (`03/04/2026` meant as 4 March in a program set to `%d/%m/%Y`): some of
/// its dates fit only the swapped order (`03/14/2026`) and none fits only the program's. Read
/// with the program's format, its rows up to the 12th of each month would be taken on the wrong
/// day without a word (and the others dropped), so the file is refused, located at the first date
/// that gives it away.
fn day_month_swapped(table: &Table, opts: &CsvOptions, ctx: &FileCtx) -> Option<Diagnostic> {
    let format = opts.date_format.as_str();
    // Day and month before the year (`%d/%m/%Y`, `%m-%d-%y %H:%M`): the orders that are
    // written both ways. A year-first date (ISO 8601, `%Y/%m/%d`) is month before day.
    let at = |f: &str| format.find(f);
    let year = at("%Y").or(at("%y"));
    let (Some(d), Some(m), Some(y)) = (at("%d"), at("%m"), year) else {
        return None;
    };
    if y < d.max(m) {
        return None;
    }
    let swapped_format = format
        .replace("%d", "\u{0}")
        .replace("%m", "%d")
        .replace("\u{0}", "%m");
    let swapped = CsvOptions {
        date_format: swapped_format.clone(),
        ..opts.clone()
    };
    let (mut swap_only, mut misread) = (None, None);
    for row in &table.rows {
        let Some(s) = table.get(row, "date") else {
            continue;
        };
        match (parse_when(s, opts), parse_when(s, &swapped)) {
            (Some(_), None) => return None,
            (None, Some(_)) => {
                swap_only.get_or_insert((row.line, s));
            }
            (Some(a), Some(b)) if a.date != b.date => {
                misread.get_or_insert((row.line, s));
            }
            _ => {}
        }
    }
    let ((line, found), (mline, mfound)) = (swap_only?, misread?);
    Some(
        ctx.error(format!(
            "the dates are written with day and month the other way round from `input.date_format` (`{format}`): line {line}'s `{found}` fits only `{swapped_format}`, and no date fits only `{format}`; dates such as line {mline}'s `{mfound}` would be read on the wrong day, so the file is not used"
        ))
        .at(line, table.column("date"))
        .field("date")
        .expected(format!("dates in the format `{format}`"))
        .found(format!("`{found}`"))
        .hint(format!(
            "save the file with dates written `{format}` (or as ISO 8601, `2026-04-01`); if every file of the program is written `{swapped_format}`, set `input.date_format: \"{swapped_format}\"` in program.yaml"
        )),
    )
}

/// A CSV reader over a reusable buffer.
type BufferReader = csv::Reader<std::io::Cursor<Vec<u8>>>;

thread_local! {
    /// One reader per thread and delimiter, reused for every file: building a reader builds
    /// csv-core's parsing automaton, which took about a tenth of the loading time when done
    /// once per file. Fields are not trimmed by the reader (that was another tenth): every
    /// use of a field below trims it, which is the same thing done only where it matters.
    static READER: std::cell::RefCell<Option<(u8, BufferReader)>> =
        const { std::cell::RefCell::new(None) };
}

/// Runs `f` with a reader positioned at the start of `text`.
fn with_reader<T>(delimiter: u8, text: &str, f: impl FnOnce(&mut BufferReader) -> T) -> T {
    let cached = READER.with(|r| r.borrow_mut().take());
    let mut reader = match cached {
        Some((d, r)) if d == delimiter => r,
        _ => csv::ReaderBuilder::new()
            .has_headers(false)
            .delimiter(delimiter)
            .flexible(true)
            .trim(csv::Trim::None)
            .from_reader(std::io::Cursor::new(Vec::new())),
    };
    let cursor = reader.get_mut();
    cursor.get_mut().clear();
    cursor.get_mut().extend_from_slice(text.as_bytes());
    cursor.set_position(0);
    // `seek_raw` discards the buffered input and resets the parser, position and end-of-file
    // state, so the reader reads `text` exactly as a new reader would (positions from byte
    // 0). It cannot fail on an in-memory cursor; should it, a new reader is used.
    if reader
        .seek_raw(std::io::SeekFrom::Start(0), csv::Position::new())
        .is_err()
    {
        reader = csv::ReaderBuilder::new()
            .has_headers(false)
            .delimiter(delimiter)
            .flexible(true)
            .trim(csv::Trim::None)
            .from_reader(std::io::Cursor::new(text.as_bytes().to_vec()));
    }
    let out = f(&mut reader);
    // A reader that held a large file is not kept: its copy of the text would stay with the
    // thread for the rest of the run (up to the 64 MiB file limit per worker).
    if reader.get_ref().get_ref().capacity() <= KEPT_READER_BYTES {
        READER.with(|r| *r.borrow_mut() = Some((delimiter, reader)));
    }
    out
}

/// Largest copy of a file the per-thread reader keeps between files (1 MiB: the files of
/// nearly every participant are far smaller, and reuse is what saves the time).
const KEPT_READER_BYTES: usize = 1024 * 1024;

/// One file being read: its text, what it should hold, how it is read and where problems go.
struct FileRead<'a> {
    text: &'a str,
    spec: &'a FileSpec,
    opts: &'a CsvOptions,
    /// The field delimiter, set in program.yaml or recognised (`sniffed`).
    delimiter: u8,
    sniffed: bool,
    ctx: &'a FileCtx,
}

fn read_records(
    reader: &mut BufferReader,
    file: &FileRead<'_>,
    diags: &mut Vec<Diagnostic>,
) -> Option<Table> {
    let FileRead {
        text,
        spec,
        opts,
        delimiter,
        sniffed,
        ctx,
    } = *file;
    let delim_text = if delimiter == b'\t' {
        "\t".to_string()
    } else {
        (delimiter as char).to_string()
    };
    // One record buffer for the whole file (csv's record iterator clones every record).
    let mut rec = csv::StringRecord::new();
    // Lines above the header (`Foods`, `Body`, an export's title and date: some exports
    // start so).
    let above = preamble(text, spec, opts, delimiter).unwrap_or_default();
    let mut skip = above.len();
    let header = loop {
        match reader.read_record(&mut rec) {
            // Nothing but (blank) line ends: no header row at all. A file with only a header
            // is fine (no rows yet); one with nothing in it is most often a failed export or
            // a copy cut short, and is named rather than read as "no data".
            Ok(false) => {
                let what = if text.is_empty() {
                    "the file is empty".to_string()
                } else {
                    "the file holds only blank lines".to_string()
                };
                diags.push(
                    ctx.error(format!("{what}; the file is not used"))
                        .at(1, None)
                        .expected(format!("a header line naming the columns {}", column_list(spec)))
                        .found(if text.is_empty() {
                            "an empty file".to_string()
                        } else {
                            format!("{} blank line(s)", text.lines().count().max(1))
                        })
                        .hint("export the file again, or delete it if there is nothing to report; a file with only the header line is read as no rows"),
                );
                return None;
            }
            Err(e) => {
                diags.push(
                    ctx.error(format!(
                        "cannot read the header row ({e}); the file is not used"
                    ))
                    .at(1, None),
                );
                return None;
            }
            Ok(true) if rec.iter().all(|f| f.trim().is_empty()) => continue,
            Ok(true) if skip > 0 => {
                skip -= 1;
                continue;
            }
            Ok(true) => break rec.clone(),
        }
    };
    // Line numbers from byte offsets: csv's own line count does not advance on `\r\n` ends,
    // and a record's position may point at the line end before it, so skip line ends first.
    // Records come in file order, so lines are counted onward from the previous record (from
    // the start again should a position ever go backwards).
    let bytes = text.as_bytes();
    let counted = std::cell::Cell::new((0usize, 1u64)); // (byte, line at that byte)
    let line_of = |pos: Option<&csv::Position>| -> u64 {
        pos.map_or(0, |p| {
            let mut b = (p.byte() as usize).min(bytes.len());
            while b < bytes.len() && matches!(bytes[b], b'\r' | b'\n') {
                b += 1;
            }
            let (mut from, mut line) = counted.get();
            if b < from {
                (from, line) = (0, 1);
            }
            // A line ends with `\n`, `\r\n` or a lone `\r` (the classic Mac ending some
            // spreadsheets still write), as the csv reader ends records.
            line += (from..b)
                .filter(|&i| {
                    bytes[i] == b'\n' || (bytes[i] == b'\r' && bytes.get(i + 1) != Some(&b'\n'))
                })
                .count() as u64;
            counted.set((b, line));
            line
        })
    };
    let header_line = line_of(header.position());
    if sep_line(text).is_some() {
        ctx.note(format!(
            "the first line, `{}`, names the field delimiter (as spreadsheets write it) and is not read",
            text.split(['\n', '\r'])
                .find(|l| !l.trim().is_empty())
                .unwrap_or_default()
                .trim()
                .escape_default()
        ));
    } else if let [t] = above.as_slice() {
        ctx.note(format!(
            "the first line, `{}`, is a title above the header (line {header_line}) and is not read",
            shorten(t, 40)
        ));
    } else if let [t, ..] = above.as_slice() {
        ctx.note(format!(
            "the {} lines above the header (line {header_line}), the first `{}`, are not read",
            above.len(),
            shorten(t, 40)
        ));
    }
    // Budgets (crate::limits): checked before anything is built from the header or the rows.
    if header.len() > MAX_CSV_COLUMNS {
        diags.push(
            ctx.error(format!(
                "the header has {} columns, more than the limit of {MAX_CSV_COLUMNS}; the file cannot be used",
                header.len()
            ))
            .at(header_line, None)
            .expected(format!("columns {}", column_list(spec)))
            .hint("check it is the right file and that its first row names the columns"),
        );
        return None;
    }
    // A column name is a field like any other: one of megabytes (a file without line ends or
    // delimiters) is not a header, and every step below would copy and scan it.
    if let Some(i) = header.iter().position(|f| f.len() > MAX_CSV_FIELD_BYTES) {
        diags.push(
            ctx.error(format!(
                "a header field of {} bytes is longer than the limit of {MAX_CSV_FIELD_BYTES}; the file cannot be used",
                header[i].len()
            ))
            .at(header_line, Some(i as u64 + 1))
            .expected(format!("columns {}", column_list(spec)))
            .found(format!("`{}…`", header[i].chars().take(40).collect::<String>()))
            .hint("check it is the right file, with line ends, and that its first row names the columns"),
        );
        return None;
    }
    let mut written: Vec<String> = header.iter().map(|h| h.trim().to_string()).collect();
    // A delimiter at the end of the header names no column (the rows' own trailing empty
    // fields are ignored below; a value there is a field too many).
    while written.len() > 1 && written.last().is_some_and(String::is_empty) {
        written.pop();
    }
    let header_ends_in_delimiter = written.len() < header.len();
    let names: Vec<String> = written.iter().map(|h| h.to_lowercase()).collect();
    let user_map = opts.columns.get(spec.kind());
    let mut columns = BTreeMap::new();
    let mut units = BTreeMap::new();
    let mut units_from_program = std::collections::BTreeSet::new();
    let mut mapped_units: Vec<(&'static str, String)> = Vec::new();
    let mut renamed = Vec::new();
    let mut dates_in_utc = false;
    let mut utc_spans = Vec::new();
    let mut usable = true;
    let mut extra = Vec::new();
    // The field of each `extra` warning, in step with it.
    let mut extra_at: Vec<usize> = Vec::new();
    let mut ignored: Vec<String> = Vec::new();
    // Fields the header does not name as one of ours.
    let mut unnamed: Vec<usize> = Vec::new();
    // An activity's start beside a date column of its own (`Date,Start,End` with times of
    // day): the start is not the date (see below the loop).
    let is_start = |k: &str| crate::program::files::ACTIVITY_STARTS.contains(&k);
    let start_beside_date = spec.name == "activity.csv"
        && written.iter().any(|w| {
            let k = header_key(w).0;
            !is_start(&k)
                && (k == "date" || spec.aliases.iter().any(|(a, c)| *a == k && *c == "date"))
        });
    // An energy column headed by its unit alone (`kJ`, `KJ`, `Cal`), as some diaries export
    // it: refused ("missing required column kcal") while `Energy (kJ)` was read. It is the
    // energy column in that unit when no other header of the file names one (by our name, an
    // alias, a unit suffix or the program's mapping). `kcal` alone is our own name already.
    let resolves_to = |w: &str, col: &str| {
        let (key, _) = header_key(w);
        let via = |k: &str| k == col || spec.aliases.iter().any(|(a, c)| *a == k && *c == col);
        user_map
            .and_then(|m| m.get(&key))
            .and_then(|t| spec.mapping_target(t))
            .is_some_and(|m| m.0 == col)
            || via(&key)
            || key.rsplit_once('_').is_some_and(|(base, _)| via(base))
    };
    let bare_unit = |w: &str| {
        let (key, unit) = header_key(w);
        let allowed = spec
            .header_units
            .iter()
            .find(|h| h.0 == "kcal")
            .map_or(&[][..], |h| h.1);
        (unit.is_none() && key != "kcal" && allowed.contains(&key.as_str())).then_some(key)
    };
    let bare_energy: Option<(usize, String)> = match written
        .iter()
        .enumerate()
        .filter_map(|(i, w)| bare_unit(w).map(|k| (i, k)))
        .collect::<Vec<_>>()[..]
    {
        [(i, ref k)]
            if !written
                .iter()
                .enumerate()
                .any(|(j, w)| j != i && resolves_to(w, "kcal")) =>
        {
            Some((i, k.clone()))
        }
        _ => None,
    };
    for (i, name) in written.iter().enumerate() {
        let (key, unit) = header_key(name);
        let ours = |k: &str| spec.all_columns().find(|c| *c == k);
        let alias = |k: &str| {
            spec.aliases
                .iter()
                .find(|(a, _)| *a == k)
                .and_then(|(_, c)| ours(c))
        };
        // The program's mapping first, then our own names, then the built-in aliases.
        let mapped = user_map
            .and_then(|m| m.get(&key))
            .and_then(|t| spec.mapping_target(t));
        let mut known = mapped
            .as_ref()
            .map(|m| m.0)
            .or_else(|| ours(&key))
            .or_else(|| alias(&key));
        if start_beside_date && mapped.is_none() && known == Some("date") && is_start(&key) {
            known = None;
        }
        let mut unit = unit;
        if known.is_none()
            && let Some((_, u)) = bare_energy.as_ref().filter(|b| b.0 == i)
        {
            known = Some("kcal");
            unit = Some(u.clone());
        }
        // A unit named by the mapping (`"Weight": weight (kg)`) is the unit of a column of
        // bare numbers: applied below, once the file's own columns are known.
        if let Some((c, Some(u))) = &mapped {
            mapped_units.push((*c, u.clone()));
        }
        // A unit written as a suffix (`weight_kg`, `duration_min`).
        if known.is_none()
            && unit.is_none()
            && let Some((base, u)) = key.rsplit_once('_')
            && let Some(c) = ours(base).or_else(|| alias(base))
            && spec
                .header_units
                .iter()
                .any(|(v, allowed, _)| *v == c && allowed.contains(&u))
        {
            known = Some(c);
            unit = Some(u.to_string());
        }
        match known {
            // The same quantity again in another unit its header names (`Weight (kg)`,
            // `Weight (lb)`: scales that export both): the first column is read, each
            // header saying its own unit, and the other is named as not read.
            Some(c)
                if let Some(&first) = columns.get(c)
                    && let Some(u) = unit.as_deref()
                    && units.get(c).is_some_and(|f| f != u) =>
            {
                ctx.note(format!(
                    "columns `{}` and `{name}` give `{c}` in two units; `{}` is read",
                    written[first], written[first]
                ));
                ignored.push(format!("`{name}`"));
            }
            Some(c) => {
                if let Some(first) = columns.insert(c, i) {
                    diags.push(
                        ctx.error(format!(
                            "column `{c}` appears twice in the header; the file is not used"
                        ))
                        .at(header_line, Some(i as u64 + 1))
                        .field(c)
                        .expected(format!("one column read as `{c}`"))
                        .found(format!(
                            "`{}` (column {}) and `{name}` (column {})",
                            written[first],
                            first + 1,
                            i + 1
                        ))
                        .hint(
                            "keep one column of each name (check `input.columns` in program.yaml)",
                        ),
                    );
                    usable = false;
                }
                if key != c && header_key(name).0 != c {
                    renamed.push((name.clone(), c));
                }
                // `Date (UTC)`, `Timestamp (GMT)`: times written without an offset are UTC.
                if c == "date" && matches!(unit.as_deref(), Some("utc" | "gmt" | "z")) {
                    dates_in_utc = true;
                }
                if let Some(u) = unit
                    && let Some((_, allowed, _)) = spec.header_units.iter().find(|h| h.0 == c)
                {
                    if allowed.is_empty() || allowed.contains(&u.as_str()) {
                        units.insert(c, u);
                    } else {
                        diags.push(
                            ctx.error(format!(
                                "unit `{u}` in the header of column `{name}` is not understood; the file is not used"
                            ))
                            .at(header_line, Some(i as u64 + 1))
                            .field(c)
                            .expected(format!("one of {}", allowed.iter().map(|a| format!("`{a}`")).collect::<Vec<_>>().join(", ")))
                            .found(format!("`{name}`"))
                            .hint("write the unit the values are in, or map the column in `input.columns`"),
                        );
                        usable = false;
                    }
                }
            }
            // A column of another program's export (`Fat mass (kg)`, `Comments`) is stated in
            // one note per file: it changes no figure, and a warning for each made every run on
            // a standard scale export end "with warnings". A header one or two letters from one
            // of ours, or holding one of ours as a word (`sorce`, `Weight 2`), may be ours
            // misspelt and keeps its warning.
            // An activity's start beside its date column is no misspelt column either.
            None if !near_ours(&key, spec) || (start_beside_date && is_start(&key)) => {
                unnamed.push(i);
                // An intake file's unit column gives the rows' energy units where it holds
                // them (`parse_intake`), which its note says: not named as a column not read.
                if !(matches!(spec.name, "intake.csv" | "activity.csv")
                    && UNIT_COLUMNS.contains(&key.as_str()))
                {
                    ignored.push(format!("`{name}`"));
                }
            }
            None => {
                unnamed.push(i);
                extra_at.push(i);
                extra.push(
                ctx.warning(format!("extra column `{name}` is ignored"))
                    .at(header_line, Some(i as u64 + 1))
                    .field(name.clone())
                    .expected(format!("columns {}", column_list(spec)))
                    .hint(format!(
                        "remove the column, check its spelling, or map it to one of ours in program.yaml: `input: {{ columns: {{ {}: {{ \"{name}\": COLUMN }} }} }}`",
                        spec.kind()
                    )),
                );
            }
        }
    }
    // The mapping's unit stands for a unit the file does not name: a unit in the column's
    // header, or a unit column (`weight` with `unit`), says it for this file and is used.
    for (c, u) in mapped_units {
        let unit_column = spec
            .header_units
            .iter()
            .find(|h| h.0 == c)
            .and_then(|h| h.2)
            .is_some_and(|r| columns.contains_key(r));
        if !units.contains_key(c) && !unit_column {
            units.insert(c, u);
            units_from_program.insert(c);
        }
    }
    // An activity's start and end (`Start`, `End`; `Start Date`, `End Date`): the start dates
    // the row, and with no duration column the end gives the duration, end − start, read row
    // by row (`records::parse_activity`). Elsewhere (a weigh-in file with two columns of
    // dates) nothing tells which date is the measurement's, and the file stays refused below.
    if spec.name == "activity.csv" {
        let key_is = |i: usize, keys: &[&str]| keys.contains(&header_key(&written[i]).0.as_str());
        let starts: Vec<usize> = (0..written.len())
            .filter(|&i| key_is(i, crate::program::files::ACTIVITY_STARTS))
            .filter(|i| unnamed.contains(i) || columns.get("date") == Some(i))
            .collect();
        let ends: Vec<usize> = unnamed
            .iter()
            .copied()
            .filter(|&i| key_is(i, crate::program::files::ACTIVITY_ENDS))
            .collect();
        if usable && let ([s], [e]) = (&starts[..], &ends[..]) {
            let (s, e) = (*s, *e);
            // `Date,Start,End`: the date column dates the row, the start and end may be times
            // of that day.
            let beside = columns.get("date").is_some_and(|&d| d != s);
            let mut taken = Vec::new();
            if !beside {
                if columns.insert("date", s).is_none() {
                    renamed.push((written[s].clone(), "date"));
                }
                taken.push(s);
            }
            if columns.contains_key("minutes") {
                // The end (and a start beside the date) is not read, and is no column of ours
                // misspelt: named in the note of columns not read rather than warned about.
                for i in [s, e].into_iter().filter(|i| !taken.contains(i)) {
                    if let Some(k) = extra_at.iter().position(|&x| x == i) {
                        extra_at.remove(k);
                        extra.remove(k);
                        ignored.push(format!("`{}`", written[i]));
                    }
                }
            } else {
                let says_utc = |i: usize| {
                    matches!(
                        header_key(&written[i]).1.as_deref(),
                        Some("utc" | "gmt" | "z")
                    )
                };
                if beside {
                    columns.insert("start", s);
                    taken.push(s);
                    if says_utc(s) {
                        utc_spans.push("start");
                    }
                }
                columns.insert("end", e);
                taken.push(e);
                if says_utc(e) {
                    utc_spans.push("end");
                }
                ctx.note(format!(
                    "no duration column: each activity's minutes are its end (`{}`) less its start (`{}`), dated by {}",
                    written[e],
                    written[s],
                    if beside {
                        "the date column (a start or end written as a time of day is on that day)"
                    } else {
                        "the start"
                    }
                ));
            }
            for i in taken {
                unnamed.retain(|&u| u != i);
                ignored.retain(|n| *n != format!("`{}`", written[i]));
                if let Some(k) = extra_at.iter().position(|&x| x == i) {
                    extra_at.remove(k);
                    extra.remove(k);
                }
            }
        }
    }
    // A column a letter or two from one of ours that the file reads already, under its own
    // name (a clinic's `Height (in)` beside `Weight (lb)`), is another measurement, not ours
    // misspelt: named in the note of columns not read. Its warning ended every run on such a
    // standard export "with warnings" (exit code 1). One holding ours as a word (`Weight 2`)
    // keeps its warning, unless its other words only describe a column the file reads already
    // (a lab export's `Test description` beside its LOINC code read as `test`).
    let mut k = 0;
    while k < extra_at.len() {
        let i = extra_at[k];
        let key = header_key(&written[i]).0;
        let near = near_by_spelling(&key, spec);
        if (!near.is_empty()
            && !holds_ours(&key, spec)
            && near.iter().all(|c| columns.contains_key(c)))
            || describes_read_column(&key, spec, &columns)
        {
            extra_at.remove(k);
            extra.remove(k);
            // In the header's order, as the other columns not read are named.
            let at = ignored
                .iter()
                .position(|n| {
                    written
                        .iter()
                        .position(|w| format!("`{w}`") == *n)
                        .is_some_and(|j| j > i)
                })
                .unwrap_or(ignored.len());
            ignored.insert(at, format!("`{}`", written[i]));
        } else {
            k += 1;
        }
    }
    // Dates written as rows of their own above the measurements, which have only a time of
    // day (`Time,Weight,…` / `" Nov 25, 2026",` / `7:12 AM,72.5 kg,…`: a smart scale app's
    // export): whether they are is known once the rows are read.
    let time_for_date_rows: Option<usize> = (!columns.contains_key("date")
        && spec.required.contains(&"date"))
    .then(|| columns.get("time").copied())
    .flatten();
    // No column named as the date by any name we know (`Recorded`, `Fecha`, `Datum`, or a
    // `Time` column holding whole date-times): the one column whose cells are all dates is it.
    // Whether there is one is known once the rows are read; until then these are the fields
    // that could be (a column named as ours other than `time` is never taken).
    let date_by_content: Vec<usize> =
        if !columns.contains_key("date") && spec.required.contains(&"date") {
            unnamed
                .iter()
                .copied()
                .chain(columns.get("time").copied())
                .collect()
        } else {
            Vec::new()
        };
    let missing: Vec<&str> = spec
        .required
        .iter()
        .filter(|c| !columns.contains_key(**c))
        .filter(|c| {
            !(**c == "date" && (time_for_date_rows.is_some() || !date_by_content.is_empty()))
        })
        // An end column stands for the duration (see above).
        .filter(|c| !(**c == "minutes" && columns.contains_key("end")))
        // A unit in the value column's header stands for the unit column.
        .filter(|c| {
            !spec
                .header_units
                .iter()
                .any(|(v, _, replaces)| *replaces == Some(**c) && units.contains_key(v))
        })
        .copied()
        .collect();
    // A unit column may also be stood for by units written in the value column's cells
    // (`72.5 kg`): whether they are is known once the rows are read.
    let units_in_cells: Option<&'static str> = spec.header_units.iter().find_map(|(v, _, r)| {
        (columns.contains_key(v) && r.is_some() && missing.iter().all(|m| Some(*m) == *r))
            .then_some(*v)
    });
    // The value columns present whose header or cells may carry the unit a missing column
    // would give: (header as written, the units it may name, the column it stands for).
    let unit_stand_in: Vec<(String, &[&str], &str)> = spec
        .header_units
        .iter()
        .filter_map(|(v, allowed, r)| Some((written[*columns.get(v)?].clone(), *allowed, (*r)?)))
        .collect();
    // An activity file of steps only (a step counter's export).
    let steps_only = spec.name == "activity.csv"
        && columns.contains_key("steps")
        && !columns.contains_key("minutes");
    let steps_col = steps_only
        .then(|| columns.get("steps").map(|&i| i as u64 + 1))
        .flatten();
    // What the header gave, for a refusal for missing columns: each column as written and what
    // it was read as (`date_at`: a column read as the date by its cells). "missing required
    // columns `date`, `weight`" beside the header alone (`When,Value,Units`), at no column,
    // left the reader to work out that `Units` had been read and `When` and `Value` had not,
    // and which names would have been. The columns as the header names them are copied: the
    // table takes the map.
    let named: Vec<(usize, &'static str)> = columns.iter().map(|(c, &i)| (i, *c)).collect();
    let header_read = |date_at: Option<usize>| {
        let mut read = named.clone();
        read.extend(date_at.map(|i| (i, "date")));
        read.sort();
        let read: Vec<String> = read
            .iter()
            .filter_map(|&(i, c)| {
                let how = if Some(i) == date_at {
                    " by its cells"
                } else {
                    ""
                };
                Some(format!(
                    "`{}` (column {}) as `{c}`{how}",
                    written.get(i)?,
                    i + 1
                ))
            })
            .collect();
        let not_read: Vec<String> = unnamed
            .iter()
            .filter(|&&i| Some(i) != date_at)
            .filter_map(|&i| Some(format!("`{}` (column {})", written.get(i)?, i + 1)))
            .collect();
        match (read.is_empty(), not_read.is_empty()) {
            (true, _) => "no column read as one of ours".to_string(),
            (false, true) => format!("read: {}", read.join(", ")),
            (false, false) => format!(
                "read: {}; not read: {}",
                read.join(", "),
                not_read.join(", ")
            ),
        }
    };
    // Where the message points: a missing unit at the value column whose header or cells may
    // carry it; any other missing column at the first column the header does not name as one
    // of ours, where it most likely is under a name of its own.
    let point_at = |missing: &[&str], date_at: Option<usize>| -> Option<u64> {
        let value_col = |m: &str| {
            spec.header_units
                .iter()
                .find(|(_, _, r)| *r == Some(m))
                .and_then(|(v, _, _)| named.iter().find(|(_, c)| c == v).map(|(i, _)| *i))
        };
        match missing {
            [m] if value_col(m).is_some() => value_col(m),
            _ => unnamed.iter().copied().find(|&i| Some(i) != date_at),
        }
        .map(|i| i as u64 + 1)
    };
    // The names each missing column may be headed by, besides its own.
    let accepted = |missing: &[&str]| {
        let mut s = format!("columns {}", column_list(spec));
        for m in missing {
            let other: Vec<String> = spec
                .aliases
                .iter()
                .filter(|(_, c)| c == m)
                .map(|(a, _)| format!("`{a}`"))
                .collect();
            if !other.is_empty() {
                s.push_str(&format!("; `{m}` may also be headed {}", other.join(", ")));
            }
        }
        if !missing.is_empty() {
            s.push_str(" (any case; a space for `_`)");
        }
        s
    };
    let missing_error = |missing: &[&str], date_at: Option<usize>| {
        let looks_like_data = names
            .first()
            .is_some_and(|f| parse_when(f, opts).is_some() || parse_decimal(f).is_ok());
        let hint = if looks_like_data {
            format!(
                "the first row looks like data; add a header row naming the columns, e.g. `{}`",
                spec.required.join(&delim_text)
            )
        } else if names.len() == 1 && delimiter != b';' && names[0].contains(';') {
            "the file seems to use `;` between fields; remove `input.delimiter` from program.yaml to have it recognised, or set it to ';'"
                .to_string()
        } else if let [only] = missing
            && let Some((header, allowed, _)) = unit_stand_in.iter().find(|(_, _, r)| r == only)
        {
            // Only the unit is missing, and the value column is there (`Date,Weight` with
            // `72.5` in its cells: a bathroom scale app's export): the unit can be named in that
            // column's header or its cells, as the README says, not only in a column of its own.
            let units: Vec<&str> = allowed
                .iter()
                .copied()
                .filter(|u| ["kg", "lb"].contains(u))
                .collect();
            let (a, b) = (
                units.first().unwrap_or(&"kg"),
                units.get(1).unwrap_or(&"lb"),
            );
            format!(
                "name the unit in the `{header}` column's header (`{header} ({a})` or `{header} ({b})`), write it in each cell (`72.5 {a}`), add a `{only}` column, or name it once for every such file in program.yaml: `input: {{ columns: {{ {}: {{ \"{header}\": {} ({a}) }} }} }}`; a number alone could be {a} or {b}",
                spec.kind(),
                unit_stand_in
                    .iter()
                    .find(|(_, _, r)| r == only)
                    .and_then(|(h, _, _)| spec.mapping_target(h).map(|t| t.0))
                    .unwrap_or("weight"),
            )
        } else if steps_only {
            // A step counter's export (`Date,Steps`): steps alone give neither minutes nor
            // energy. Turning steps into energy needs the stride (distance) and the pace or
            // the time spent walking (a cadence gives the intensity only per minute walked),
            // which a daily step total does not give; so it is not guessed.
            "steps alone cannot be turned into activity minutes or energy: that needs the time \
             spent walking (and the pace, or the stride length), which a daily step count does \
             not give. Add an `activity` column (e.g. `walking`) and a `minutes` column with the \
             minutes walked (the steps are then kept beside them), export the workouts with \
             their durations instead, or leave steps to an external module \
             (plugins/example-external summarises them)"
                .to_string()
        } else if let Some((i, col, base, unit)) = missing.iter().find_map(|m| {
            // A missing value column (`weight`, `kcal`) and one column not read whose header
            // names a unit it takes (`Poids (kg)`, `Énergie (kcal)`: a spreadsheet in another
            // language): that column is most likely it, and the hint gives the mapping to
            // copy, not "Their name". Its unit then comes with it, so a missing `unit` is no
            // more to add.
            let (_, allowed, _) = spec.header_units.iter().find(|(v, _, _)| v == m)?;
            let mut with_unit = unnamed.iter().filter_map(|&i| {
                let (_, unit) = header_key(written.get(i)?);
                let unit = unit.filter(|u| allowed.contains(&u.as_str()))?;
                Some((i, unit))
            });
            match (with_unit.next(), with_unit.next()) {
                (Some((i, unit)), None) => {
                    let w = written[i].trim().trim_start_matches('\u{feff}');
                    let base = w.rsplit_once(['(', '[']).map_or(w, |(b, _)| b).trim();
                    Some((i, *m, base.to_string(), unit))
                }
                _ => None,
            }
        }) {
            let unit_too = spec
                .header_units
                .iter()
                .find(|(v, _, _)| *v == col)
                .and_then(|(_, _, r)| *r)
                .filter(|r| missing.contains(r))
                .map(|r| format!(" (and `{r}` is then not needed: the header gives it)"))
                .unwrap_or_default();
            format!(
                "`{}` (column {}) names a unit of `{col}` ({unit}) in its header; if it holds the {col}, map it in program.yaml: `input: {{ columns: {{ {}: {{ \"{base}\": {col} }} }} }}`, and the unit in its brackets is read with it{unit_too}",
                written[i].trim().trim_start_matches('\u{feff}'),
                i + 1,
                spec.kind(),
            )
        } else {
            format!(
                "name the columns in the first row (any order), or map the file's own names to ours in program.yaml: `input: {{ columns: {{ {}: {{ \"Their name\": {} }} }} }}`",
                spec.kind(),
                missing[0]
            )
        };
        let s = if missing.len() == 1 { "" } else { "s" };
        ctx.error(format!(
            "{}missing required column{s} {}; the file is not used",
            if looks_like_data {
                "no header row: "
            } else {
                ""
            },
            missing
                .iter()
                .map(|m| format!("`{m}`"))
                .collect::<Vec<_>>()
                .join(", ")
        ))
        .at(
            header_line,
            steps_col.or(point_at(missing, date_at).filter(|_| !looks_like_data)),
        )
        .expected(accepted(missing))
        .found(format!(
            "`{}`: {}",
            written.join(&delim_text),
            header_read(date_at)
        ))
        .hint(hint)
    };
    if !missing.is_empty() && units_in_cells.is_none() {
        // The date, when it was to be looked for by its cells, is missing too.
        let mut missing = missing.clone();
        if time_for_date_rows.is_none() && !date_by_content.is_empty() {
            missing.insert(0, "date");
        }
        diags.push(missing_error(&missing, None));
        usable = false;
    }
    if !usable {
        return None;
    }
    // Problems of the rows, kept apart until the file is known to be usable.
    let mut row_diags: Vec<Diagnostic> = Vec::new();
    // The last field a row must reach: rows that end early, before no required column, are
    // read with the rest empty (exports leave off trailing empty values).
    let last_required = spec
        .required
        .iter()
        .filter_map(|c| columns.get(c))
        .max()
        .copied();
    let (mut short_rows, mut trailing_empty) = (0usize, 0usize);
    // The date row above the rows being read, and how many there were.
    let mut current_date: Option<(u64, String)> = None;
    let mut date_rows = 0usize;
    // The first line that repeats the header.
    let mut repeated_headers: Option<u64> = None;
    let mut headers: BTreeMap<&'static str, String> = columns
        .iter()
        .map(|(c, &i)| (*c, written[i].clone()))
        .collect();
    // The date of each measurement, from the date row above it, is kept as one more field.
    if let Some(t) = time_for_date_rows {
        columns.insert("date", names.len());
        headers.insert("date", written[t].clone());
    }
    let mut table = Table {
        columns,
        headers,
        rows: Vec::new(),
        text: String::with_capacity(text.len()),
        bounds: Vec::new(),
        width: names.len() + usize::from(time_for_date_rows.is_some()),
        date_rows_in: time_for_date_rows,
        units,
        units_from_program,
        renamed,
        written: written.clone(),
        header_line,
        dates_in_utc,
        utc_spans,
        ..Table::empty(delimiter, sniffed)
    };
    let mut records = 0usize;
    // Rows of one field too many whose last is empty, read as ending in a delimiter, whose
    // extra field may instead come from a delimiter inside a text value (`walk, brisk` in a
    // file whose last column, `Notes`, is empty): the row, its line and that value's field.
    let mut split_suspects: Vec<(csv::StringRecord, u64, usize)> = Vec::new();
    // Rows of the header's width or fewer, and rows read as ending in a delimiter otherwise.
    let (mut plain_rows, mut other_trailing) = (0usize, 0usize);
    // The last field a row's read columns reach: a value split by a delimiter after it (an
    // unread `Notes` last) shifts nothing that is read.
    let last_read = table
        .columns
        .values()
        .copied()
        .filter(|&i| i < names.len())
        .max()
        .unwrap_or(0);
    // Rows whose unread last text value holds the delimiter, read without it.
    let mut split_unread = 0usize;
    let mut formula_cells = false;
    loop {
        match reader.read_record(&mut rec) {
            Ok(true) => {
                records += 1;
                if records > MAX_CSV_ROWS {
                    diags.append(&mut extra);
                    diags.append(&mut row_diags);
                    diags.push(
                        ctx.error(format!(
                            "the file has more than {MAX_CSV_ROWS} rows, the limit for one file; it was not read further and cannot be used"
                        ))
                        .at(line_of(rec.position()), Some(1))
                        .expected(format!("at most {MAX_CSV_ROWS} rows"))
                        .found(format!(
                            "row {records} starting here, and the file was not read past it"
                        ))
                        .hint("check it is the right file; split a very long history into the reporting years"),
                    );
                    return None;
                }
            }
            Ok(false) => break,
            Err(e) => {
                let line = e.position().map(|p| line_of(Some(p)));
                ctx.count_row();
                let mut d = ctx.warning(format!("unreadable row is dropped ({e})"));
                if let Some(l) = line {
                    d = d.at(l, None);
                }
                row_diags.push(d);
                continue;
            }
        }
        let line = line_of(rec.position());
        if rec.iter().all(|f| f.trim().is_empty()) {
            continue;
        }
        // The header again (exports appended to one another): no data.
        if rec.len() >= written.len()
            && rec.iter().zip(&written).all(|(f, h)| f.trim() == h)
            && rec.iter().skip(written.len()).all(|f| f.trim().is_empty())
        {
            repeated_headers.get_or_insert(line);
            continue;
        }
        // The header again with its columns in another order, or some of them (exports of two
        // versions of an app, joined): the rows below it were read under the first header's
        // columns, so an
        // intake file's `kcal` took its `protein_g` (90 kcal a day) with only an "unreadable
        // date" warning about the header line. Which rows follow which header cannot be told
        // from the rows alone: the file is refused, located there.
        let cells: Vec<&str> = rec
            .iter()
            .map(str::trim)
            .filter(|f| !f.is_empty())
            .collect();
        if cells.len() >= 2 && cells.iter().all(|f| written.iter().any(|h| h == f)) {
            let header_text = |fields: Vec<&str>| fields.join(&delim_text);
            diags.append(&mut extra);
            diags.push(
                ctx.error(format!(
                    "the header is repeated on line {line} with other columns or in another order; the rows below it cannot be read under the first header's columns, and the file is not used"
                ))
                .at(line, Some(1))
                .expected(format!(
                    "the header as on line {header_line}: `{}`",
                    header_text(written.iter().map(|h| h.as_str()).collect())
                ))
                .found(format!("`{}`", header_text(cells)))
                .hint(format!(
                    "the file joins exports with different columns, and a participant has one {}: give the rows below line {line} the first header's columns, in its order, and delete this line",
                    spec.name
                )),
            );
            return None;
        }
        // The header of another export pasted below this one's rows (a home scale app's
        // weigh-ins, then the clinic's export, with other columns and perhaps another
        // delimiter): each of its rows was dropped as a row of the wrong shape with a hint to
        // quote text, the header itself among them, and the clinic's weigh-ins were lost
        // with a run that ended "with warnings". As for a header in another order, the rows
        // below it cannot be read under the first header's columns.
        if let Some((as_written, named)) = other_export_header(&rec, delimiter, spec, opts) {
            diags.append(&mut extra);
            diags.push(
                ctx.error(format!(
                    "line {line} is the header of another export, not a row (`{named}` is a column name); the rows below it cannot be read under the first header's columns, and the file is not used"
                ))
                .at(line, Some(1))
                .expected(format!(
                    "rows under the header on line {header_line}: `{}`",
                    written.join(&delim_text)
                ))
                .found(format!("`{}`", shorten(&as_written, 200)))
                .hint(if spec.name == "weights.csv" {
                    format!(
                        "a participant has one weights.csv, with every weigh-in under one header: give the rows below line {line} the first header's columns and delete this line; where the exports use different units, write each weight with its unit (`161.6 lb`) under a header that names none (`Weight`); add a `source` column (`clinic`, `home scale`) to tell the clinic's weigh-ins from the home scale's"
                    )
                } else {
                    format!(
                        "a participant has one {}, with one header: give the rows below line {line} the first header's columns, in its order, and delete this line",
                        spec.name
                    )
                }),
            );
            return None;
        }
        // A date row: the date alone, in the first field.
        if time_for_date_rows.is_some()
            && let Some(first) = rec.get(0).map(str::trim)
            && rec.iter().skip(1).all(|f| f.trim().is_empty())
            && parse_when(first, opts).is_some_and(|w| w.time.is_none())
        {
            current_date = Some((line, first.to_string()));
            date_rows += 1;
            continue;
        }
        if let Some(i) = rec.iter().position(|f| f.len() > MAX_CSV_FIELD_BYTES) {
            ctx.count_row();
            row_diags.push(
                ctx.warning(format!(
                    "a field of {} bytes is longer than the limit of {MAX_CSV_FIELD_BYTES}; the row is dropped",
                    rec[i].len()
                ))
                .at(line, Some(i as u64 + 1))
                .expected(format!("fields of at most {MAX_CSV_FIELD_BYTES} bytes"))
                .found(format!("`{}`", shorten(&rec[i], 40)))
                .hint("check for a quote (`\"`) that is never closed"),
            );
            continue;
        }
        let width = names.len();
        // A text value split by delimiters inside it, into the fields too many.
        let split = split_text_at(&rec, rec.len().saturating_sub(width), opts);
        let fits = if rec.len() > width {
            // A delimiter at the end of each row (`2026-04-01,72,kg,`) gives empty extra fields.
            let empty = rec.iter().skip(width).all(|f| f.trim().is_empty());
            trailing_empty += usize::from(empty);
            match split {
                Some(i) if empty && i <= last_read && rec.len() == width + 1 => {
                    split_suspects.push((rec.clone(), line, i))
                }
                _ if empty => other_trailing += 1,
                _ => {}
            }
            if !empty && split.is_some_and(|i| i > last_read) {
                // The split value is after every column read (a note): the row reads as is.
                split_unread += 1;
                true
            } else {
                empty
            }
        } else if rec.len() < width {
            let short = last_required.is_none_or(|r| r < rec.len());
            short_rows += usize::from(short);
            short
        } else {
            true
        };
        plain_rows += usize::from(rec.len() <= width && fits);
        // A summary written across the row's fields as one (`Average: 88.15 kg`, `Total 510`
        // below the rows): no measurement, and no row of the wrong shape either.
        if !fits
            && let Some(f) = rec.iter().map(str::trim).find(|f| !f.is_empty())
            && starts_as_summary(f)
        {
            let mut rows = table.summary_rows.borrow_mut();
            rows.0 += 1;
            rows.1.get_or_insert((line, shorten(f, 40)));
            continue;
        }
        // A row of the wrong shape dated after a withdrawal of consent: not read, not counted.
        if !fits && ctx.after_consent(&rec, opts) {
            continue;
        }
        // The field a delimiter inside a value split the row at: a text split with a space
        // after the delimiter, else (no space after it, inside a text or a number's
        // thousands) the one join of two fields that makes the row read.
        let split_at = if fits {
            None
        } else {
            split.or_else(|| {
                (rec.len() == width + 1)
                    .then(|| {
                        let cols: Vec<Option<&'static str>> = (0..width)
                            .map(|j| {
                                table
                                    .columns
                                    .iter()
                                    .find(|&(_, &k)| k == j)
                                    .map(|(&c, _)| c)
                            })
                            .collect();
                        split_by_reading(&rec, &cols, opts)
                    })
                    .flatten()
            })
        };
        if let Some(i) = split_at {
            ctx.count_row();
            row_diags.push(split_text_warning(
                ctx,
                &rec,
                i,
                line,
                width,
                written.get(i).map(String::as_str),
                delimiter,
            ));
            continue;
        }
        if !fits {
            ctx.count_row();
            // A field holding line breaks was quoted, and its quote closed lines below, or
            // never: the lines between were read into it, and are lost with this row. Said
            // so, with the lines, rather than only "N fields" (a quote left open in a weight,
            // `"81,4`, took every row after it into the row's last field).
            let swallowed = rec.iter().enumerate().find_map(|(k, f)| {
                // A quote never closed runs to the end of the file, its last line end included.
                let f = f.trim_end_matches(['\r', '\n']);
                let breaks =
                    f.matches('\n').count() + f.matches('\r').count() - f.matches("\r\n").count();
                (breaks > 0).then_some((k, breaks))
            });
            let lost = swallowed.map_or(String::new(), |(k, breaks)| {
                let below = if breaks == 1 {
                    format!("the line below it (line {})", line + 1)
                } else {
                    format!(
                        "the {breaks} lines below it (lines {}–{})",
                        line + 1,
                        line + breaks as u64
                    )
                };
                format!(
                    ", and with it {below}: a quote (`\"`) in field {}{} is closed only there, \
                     or never, so {} read into that field",
                    k + 1,
                    written
                        .get(k)
                        .map_or(String::new(), |n| format!(" (`{n}`)")),
                    if breaks == 1 { "it was" } else { "they were" }
                )
            });
            let mut d = ctx
                .warning(format!(
                    "row has {} but the header has {}; the row is dropped{lost}",
                    fields(rec.len()),
                    names.len()
                ))
                // The field the quote opened in, else the first beyond the header (a row too
                // long) or the first the row lacks (too short): it had a line only.
                .at(
                    line,
                    Some(match swallowed {
                        Some((k, _)) => k as u64 + 1,
                        None => rec.len().min(names.len()) as u64 + 1,
                    }),
                )
                .expected(fields(names.len()))
                .found(row_as_found(&rec, &delim_text));
            let split_decimal = rec.len() == names.len() + 1
                && delimiter == b','
                && rec
                    .iter()
                    .map(str::trim)
                    .zip(rec.iter().map(str::trim).skip(1))
                    .any(|(a, b)| {
                        !a.is_empty()
                            && !b.is_empty()
                            && a.chars().all(|c| c.is_ascii_digit())
                            && b.chars().all(|c| c.is_ascii_digit())
                    });
            d = d.hint(if swallowed.is_some() {
                "close the quote where the value ends, or remove it; then the lines below are \
                 read as rows of their own"
                    .to_string()
            } else if split_decimal {
                "a decimal comma (`72,5`) splits a number into two fields; write `72.5`".to_string()
            } else {
                "every row needs one value per header column (leave a value empty, but keep its delimiter); quote text containing the delimiter".to_string()
            });
            row_diags.push(d);
            continue;
        }
        let first = table.bounds.len();
        for f in rec.iter().take(width) {
            let start = table.text.len();
            match spreadsheet_text(f) {
                Some(inside) => {
                    table.text.push_str(&inside);
                    formula_cells = true;
                }
                None => table.text.push_str(f),
            }
            table.bounds.push((start, table.text.len()));
        }
        for _ in rec.len()..width {
            let end = table.text.len();
            table.bounds.push((end, end));
        }
        if time_for_date_rows.is_some() {
            let start = table.text.len();
            if let Some((_, d)) = &current_date {
                table.text.push_str(d);
            }
            table.bounds.push((start, table.text.len()));
        }
        let short = (rec.len() < width).then_some(rec.len());
        table.rows.push(Row { line, first, short });
        ctx.count_row();
    }
    if formula_cells {
        table.recognised("cells written as a spreadsheet's text formula (`=\"2026-04-10\"`), read as the text inside");
    }
    // A row of one field too many, the last empty, with a text value split in two before a
    // column read (`2026-03-02,walk, brisk,30,` under `Date,Activity,Minutes,Notes`) was read
    // as ending in a delimiter, shifted: `brisk` as the minutes. Where the file's rows do not
    // end in a delimiter (more rows of the header's width than rows that do, and a header
    // that does not), it is the field too many it looks like, and dropped with its place.
    if !split_suspects.is_empty() && !header_ends_in_delimiter && plain_rows > other_trailing {
        trailing_empty -= split_suspects.len();
        let lines: std::collections::BTreeSet<u64> =
            split_suspects.iter().map(|(_, l, _)| *l).collect();
        table.rows.retain(|r| !lines.contains(&r.line));
        for (rec, line, i) in &split_suspects {
            row_diags.push(split_text_warning(
                ctx,
                rec,
                *i,
                *line,
                names.len(),
                written.get(*i).map(String::as_str),
                delimiter,
            ));
        }
        row_diags.sort_by_key(|d| d.line);
    }
    let has_unit =
        |s: &str| s.chars().any(|c| c.is_ascii_digit()) && s.chars().any(char::is_alphabetic);
    // Date rows, or a column of dates under another name, were to stand for a missing date
    // column: without either, it is missing after all (and so is a unit column that units in
    // the cells do not stand for).
    let date_unnamed = if time_for_date_rows.is_some() {
        date_rows == 0
    } else {
        !date_by_content.is_empty()
    };
    let dated: Vec<usize> = if date_unnamed {
        date_by_content
            .iter()
            .copied()
            .filter(|&i| {
                // Nine in ten at least: a typing error in one cell costs its row (with the
                // date's own warning), not the file. Rows summing up the others (`Average`,
                // `Total change` below the dates) are no cells of dates or of anything else.
                let (mut cells, mut dates) = (0usize, 0usize);
                for c in table
                    .rows
                    .iter()
                    .filter_map(|r| table.field(r, i))
                    .filter(|c| !is_summary_date(c))
                {
                    cells += 1;
                    dates +=
                        usize::from(parse_when(c, opts).is_some() || numeric_parts(c).is_some());
                }
                cells > 0 && 10 * dates >= 9 * cells
            })
            .collect()
    } else {
        Vec::new()
    };
    if let [i] = dated[..] {
        table.columns.insert("date", i);
        if table.columns.get("time") == Some(&i) {
            table.columns.remove("time");
            table.headers.remove("time");
        }
        table.headers.insert("date", written[i].clone());
        table.date_rows_in = None;
        ignored.retain(|n| *n != format!("`{}`", written[i]));
        if let Some(k) = extra_at.iter().position(|&e| e == i) {
            extra_at.remove(k);
            extra.remove(k);
        }
        ctx.note(format!(
            "column `{}` read as `date`: no column is named as the date, and it is the only one whose cells are dates",
            written[i]
        ));
    } else if date_unnamed {
        let units_there = units_in_cells.is_some_and(|v| {
            table
                .rows
                .iter()
                .any(|r| table.get(r, v).is_some_and(has_unit))
        });
        let mut missing: Vec<&str> = missing.iter().copied().filter(|_| !units_there).collect();
        missing.insert(0, "date");
        let mut e = missing_error(&missing, None);
        if dated.len() > 1 {
            let names: Vec<String> = dated.iter().map(|&i| format!("`{}`", written[i])).collect();
            e = e.hint(format!(
                "columns {} each hold dates, so which one dates a row cannot be told; name it in program.yaml: `input: {{ columns: {{ {}: {{ \"{}\": date }} }} }}`",
                names.join(" and "),
                spec.kind(),
                written[dated[0]]
            ));
        }
        diags.push(e);
        return None;
    }
    if date_rows > 0 {
        ctx.note(format!(
            "dates taken from the {} date rows above the measurements, whose `{}` column holds their time of day",
            crate::diag::thousands(date_rows),
            written[time_for_date_rows.unwrap_or(0)]
        ));
    }
    // Units in the cells were to stand for a missing unit column: without any, the column is
    // missing after all.
    if let Some(v) = units_in_cells
        && !missing.is_empty()
        && !table
            .rows
            .iter()
            .any(|r| table.get(r, v).is_some_and(has_unit))
    {
        diags.push(missing_error(&missing, dated.first().copied()));
        return None;
    }
    // Extra columns are only worth a word when the header itself is right.
    diags.extend(extra);
    if !ignored.is_empty() {
        ctx.note(format!(
            "{} {} {} not read (the columns read are {})",
            if ignored.len() == 1 {
                "column"
            } else {
                "columns"
            },
            ignored.join(", "),
            if ignored.len() == 1 { "is" } else { "are" },
            column_list(spec)
        ));
    }
    table.dropped = (row_diags.len(), row_diags.first().cloned());
    diags.extend(row_diags);
    let rows = |n: usize| {
        if n == 1 {
            "1 row".to_string()
        } else {
            format!("{} rows", crate::diag::thousands(n))
        }
    };
    if let Some(line) = repeated_headers {
        ctx.note(format!(
            "the header is repeated inside the file (first on line {line}: exports joined together); such lines are not read as data"
        ));
    }
    if short_rows > 0 {
        ctx.note(format!(
            "{} with fewer fields than the header (values left off at the end) read with the missing values empty",
            rows(short_rows)
        ));
    }
    if split_unread > 0 {
        ctx.note(format!(
            "{} with a delimiter inside the last value, in a column not read (an unquoted `{}` in a note), read without it",
            rows(split_unread),
            char::from(delimiter)
        ));
    }
    if trailing_empty > 0 {
        ctx.note(format!(
            "{} with empty fields after the last column (a delimiter at the end of the row) read without them",
            rows(trailing_empty)
        ));
    }
    Some(table)
}

/// Most lines above the header that are read as a preamble (titles, export dates, a person's
/// name or an app's metadata): exports put a few such lines above the table; more than this
/// and the file is more likely not the table it should be (common practice).
pub const MAX_PREAMBLE_LINES: usize = 10;

/// The non-blank lines above the header, when the header is not the first line: a `sep=;`
/// line, or up to [`MAX_PREAMBLE_LINES`] lines above a header that names the date column
/// among others. Each of those lines holds no quote and either no delimiter (`Body`,
/// `Weight export for P1`, `Exported 2026-10-01 08:00`) or fewer fields than the header,
/// none of them one of the file's columns: a health app's metadata line (the table's name, a
/// version and a count, `com.example.health.weight,6310002,4`) above its header. A line that
/// names a column or has as many fields as the header below it is the header itself, as
/// before, so a header with wrong names is still reported as such. Lines holding nothing but
/// delimiters count as blank, as the reader skips them.
fn preamble(text: &str, spec: &FileSpec, opts: &CsvOptions, delimiter: u8) -> Option<Vec<String>> {
    if sep_line(text).is_some() {
        return text
            .split(['\n', '\r'])
            .find(|l| !l.trim().is_empty())
            .map(|l| vec![l.trim().to_string()]);
    }
    Some(preamble_at(text, spec, opts, delimiter)?.0)
}

/// [`preamble`]'s lines (without the `sep=` case) and the byte offset of the header line.
fn preamble_at(
    text: &str,
    spec: &FileSpec,
    opts: &CsvOptions,
    delimiter: u8,
) -> Option<(Vec<String>, usize)> {
    let d = delimiter as char;
    let lines: Vec<(usize, &str)> = text
        .split(['\n', '\r'])
        .scan(0usize, |at, l| {
            let start = *at;
            *at += l.len() + 1;
            Some((start, l))
        })
        .filter(|(_, l)| l.split(d).any(|f| !f.trim().is_empty()))
        .take(MAX_PREAMBLE_LINES + 1)
        .collect();
    let user_map = opts.columns.get(spec.kind());
    // Which of the file's columns a header field names, if any.
    let column = |h: &str| -> Option<String> {
        let key = header_key(h.trim().trim_matches('"').trim_start_matches('\u{feff}')).0;
        if spec.all_columns().any(|c| c == key) {
            return Some(key);
        }
        spec.aliases
            .iter()
            .find(|(a, _)| *a == key)
            .map(|(_, c)| c.to_string())
            .or_else(|| {
                user_map
                    .and_then(|m| m.get(&key))
                    .and_then(|t| spec.mapping_target(t))
                    .map(|(c, _)| c.to_string())
            })
    };
    let fields = |l: &str| if l.contains(d) { l.split(d).count() } else { 1 };
    for k in 1..lines.len() {
        let above = lines[k - 1].1;
        // A line above the header holds no quote (so the reader ends its record where the
        // line ends) and names none of the file's columns.
        if above.contains('"') || above.contains(d) && above.split(d).any(|f| column(f).is_some()) {
            return None;
        }
        let (at, header) = lines[k];
        if !header.contains(d)
            || !header
                .split(d)
                .any(|h| column(h).is_some_and(|c| c == "date"))
        {
            continue;
        }
        let n = fields(header);
        return lines[..k].iter().all(|(_, l)| fields(l) < n).then(|| {
            let above = lines[..k].iter().map(|(_, l)| l.trim().to_string());
            (above.collect(), at)
        });
    }
    None
}

/// The delimiter of a file whose header is below a preamble ([`preamble`]): of comma,
/// semicolon and tab, the first whose header (naming the date column) is found below lines
/// that are no header, and that [`sniff_delimiter`] also picks for the text from that header
/// on. `None` when no such header is found: the whole text is sniffed as before.
fn sniff_below_preamble(text: &str, spec: &FileSpec, opts: &CsvOptions) -> Option<u8> {
    [b',', b';', b'\t'].into_iter().find(|&d| {
        preamble_at(text, spec, opts, d)
            .is_some_and(|(_, at)| sniff_delimiter(&text[at..]) == Some(d))
    })
}

/// The delimiter a first line `sep=;` names: spreadsheets write it above the header of a CSV
/// file to say which character separates its fields, and read it so (common practice of
/// spreadsheet programs; no standard describes it). The line is not part of the table.
fn sep_line(text: &str) -> Option<u8> {
    let first = text.split(['\n', '\r']).find(|l| !l.trim().is_empty())?;
    let first = first.trim_start_matches('\u{feff}');
    let rest = first
        .get(..4)
        .filter(|p| p.eq_ignore_ascii_case("sep="))
        .map(|_| &first[4..])?;
    match rest.as_bytes() {
        [b'\t'] => Some(b'\t'),
        [d] if d.is_ascii_punctuation() && !matches!(d, b'"' | b'\'') => Some(*d),
        _ => None,
    }
}

/// A field longer than [`MAX_CSV_FIELD_READ_BYTES`]: where it starts (line and column, 1-based,
/// lines ending as the reader ends them), its length in bytes as written (its quotes included)
/// and its first bytes.
struct OverlongField<'a> {
    line: u64,
    column: u64,
    bytes: usize,
    quoted: bool,
    start: &'a str,
}

/// The first field of `text` longer than [`MAX_CSV_FIELD_READ_BYTES`], found in one pass over
/// the bytes without copying anything, as the CSV reader splits them (csv-core 0.1, RFC 4180
/// with its usual extensions): a field that starts with `"` is quoted until a `"` that is not
/// doubled, and whatever follows that up to the delimiter belongs to it too; a `"` elsewhere is
/// a character; records end at `\n`, `\r\n` or a lone `\r`, except inside quotes.
fn overlong_field(text: &str, delimiter: u8) -> Option<OverlongField<'_>> {
    let b = text.as_bytes();
    // Nothing to find in a file shorter than the limit (nearly every file).
    if b.len() <= MAX_CSV_FIELD_READ_BYTES {
        return None;
    }
    let (mut line, mut column) = (1u64, 1u64);
    let mut i = 0;
    while i < b.len() {
        let (start, start_line) = (i, line);
        let quoted = b[i] == b'"';
        if quoted {
            i += 1;
            loop {
                match b.get(i) {
                    None => break,
                    Some(b'"') if b.get(i + 1) == Some(&b'"') => i += 2,
                    Some(b'"') => {
                        i += 1;
                        break;
                    }
                    Some(b'\r') if b.get(i + 1) == Some(&b'\n') => {
                        line += 1;
                        i += 2;
                    }
                    Some(b'\n' | b'\r') => {
                        line += 1;
                        i += 1;
                    }
                    Some(_) => i += 1,
                }
            }
        }
        while i < b.len() && !matches!(b[i], b'\n' | b'\r') && b[i] != delimiter {
            i += 1;
        }
        if i - start > MAX_CSV_FIELD_READ_BYTES {
            let mut head = start + 40.min(i - start);
            while !text.is_char_boundary(head) {
                head += 1;
            }
            return Some(OverlongField {
                line: start_line,
                column,
                bytes: i - start,
                quoted,
                start: &text[start..head],
            });
        }
        match b.get(i) {
            Some(&d) if d == delimiter => column += 1,
            Some(b'\r') if b.get(i + 1) == Some(&b'\n') => {
                (line, column) = (line + 1, 1);
                i += 1;
            }
            Some(_) => (line, column) = (line + 1, 1),
            None => {}
        }
        i += 1;
    }
    None
}

/// The 1-based line on which byte `at` of `b` lies, lines ending with `\n`, `\r\n` or a lone
/// `\r` as the reader ends records.
/// Lines after the first that start with a byte-order mark (U+FEFF): how many, and the first
/// one's line; `None` when there are none.
fn line_start_marks(text: &str) -> Option<(usize, u64)> {
    let mut count = 0usize;
    let mut first = None;
    let b = text.as_bytes();
    for (i, _) in text.match_indices('\u{feff}') {
        if i > 0 && matches!(b[i - 1], b'\n' | b'\r') {
            count += 1;
            first.get_or_insert_with(|| line_at(b, i));
        }
    }
    first.map(|f| (count, f))
}

fn line_at(b: &[u8], at: usize) -> u64 {
    1 + b[..at]
        .iter()
        .enumerate()
        .filter(|&(i, &c)| c == b'\n' || (c == b'\r' && b.get(i + 1) != Some(&b'\n')))
        .count() as u64
}

/// The first `max` characters of `s`, with `…` when cut.
fn shorten(s: &str, max: usize) -> String {
    match s.char_indices().nth(max) {
        Some((i, _)) => format!("{}…", &s[..i]),
        None => s.to_string(),
    }
}

/// Whether a header `key` (after [`header_key`]) that is none of ours may be one of ours
/// misspelt: within two edits of a column name of five letters or more (`wieght`, `sorce`),
/// of a four-letter one only when the letters are the same (`tiem`, `dtae`: two letters
/// swapped), else one edit; or one edit of an alias, or holding a column name as a whole word
/// (`weight_2`). Not an alias's word, nor two edits of one: `Fat mass (kg)` holds the alias
/// `mass` of `weight`, and `Bone mass (kg)` is two edits from `body_mass`; both are other
/// measurements. Two edits of four letters is half the word: a food diary's `Meal` (two from
/// `kcal`) and a scale's `Note` (two from `date`) were warned about as ours misspelt, and every
/// run on such a standard export ended "with warnings".
fn near_ours(key: &str, spec: &FileSpec) -> bool {
    !near_by_spelling(key, spec).is_empty() || holds_ours(key, spec)
}

/// The columns of ours `key` is a spelling slip of, by the edit rules of [`near_ours`].
fn near_by_spelling(key: &str, spec: &FileSpec) -> Vec<&'static str> {
    let distance = |c: &str| crate::activities::edit_distance(key, c);
    let same_letters = |c: &str| {
        let sorted = |s: &str| {
            let mut v: Vec<char> = s.chars().collect();
            v.sort_unstable();
            v
        };
        sorted(key) == sorted(c)
    };
    spec.all_columns()
        .filter(|c| {
            let d = distance(c);
            let letters = c.chars().count();
            d <= 1 || (d == 2 && (letters >= 5 || (letters == 4 && same_letters(c))))
        })
        .collect()
}

/// Words that name something about a value rather than a second value: a lab export's `Test
/// description`, `Test name` or `Test code` beside the column it reads as `test`, a tracker's
/// `Activity type` beside `Activity` (common practice of such exports).
const DESCRIBING_WORDS: [&str; 12] = [
    "description",
    "name",
    "code",
    "comment",
    "comments",
    "note",
    "notes",
    "text",
    "label",
    "type",
    "category",
    "status",
];

/// Whether `key` (as [`header_key`] writes it) is a column of ours that the file reads already,
/// in `read`, with only [`DESCRIBING_WORDS`] beside it (`test_description`): another field about
/// the same thing, not ours misspelt. A standard lab export (`Specimen date;LOINC;Test
/// description;Result;Units` with `LOINC` mapped to `test`) ended every run with a warning.
fn describes_read_column(key: &str, spec: &FileSpec, read: &BTreeMap<&'static str, usize>) -> bool {
    let words: Vec<&str> = key.split('_').filter(|w| !w.is_empty()).collect();
    spec.all_columns()
        .filter(|c| read.contains_key(c))
        .any(|c| {
            let parts: Vec<&str> = c.split('_').collect();
            parts.iter().all(|p| words.contains(p))
                && words.iter().any(|w| !parts.contains(w))
                && words
                    .iter()
                    .all(|w| parts.contains(w) || DESCRIBING_WORDS.contains(w))
        })
}

/// Whether `key` holds a column name of ours as a whole word (`weight_2`) or is one edit from
/// an alias: by the rules of [`near_ours`] other than a slip in one of our names.
fn holds_ours(key: &str, spec: &FileSpec) -> bool {
    let words: Vec<&str> = key
        .split(|c: char| !c.is_alphanumeric())
        .filter(|w| !w.is_empty())
        .collect();
    spec.all_columns()
        .any(|c| c.split('_').all(|part| words.contains(&part)))
        || spec
            .aliases
            .iter()
            .any(|(a, _)| crate::activities::edit_distance(key, a) <= 1)
}

/// The column of ours a header cell names, as the header row is read: the program's mapping
/// (`input.columns`), our own names, the built-in aliases, or a name with a unit suffix
/// (`weight_kg`).
fn column_named(name: &str, spec: &FileSpec, opts: &CsvOptions) -> Option<&'static str> {
    let (key, unit) = header_key(name);
    let ours = |k: &str| spec.all_columns().find(|c| *c == k);
    let alias = |k: &str| {
        spec.aliases
            .iter()
            .find(|(a, _)| *a == k)
            .and_then(|(_, c)| ours(c))
    };
    if let Some((c, _)) = opts
        .columns
        .get(spec.kind())
        .and_then(|m| m.get(&key))
        .and_then(|t| spec.mapping_target(t))
    {
        return Some(c);
    }
    ours(&key).or_else(|| alias(&key)).or_else(|| {
        if unit.is_some() {
            return None;
        }
        let (base, u) = key.rsplit_once('_')?;
        let c = ours(base).or_else(|| alias(base))?;
        spec.header_units
            .iter()
            .any(|(v, allowed, _)| *v == c && allowed.contains(&u))
            .then_some(c)
    })
}

/// A row that is the header of another export (`Visit Date,Patient Ref,Weight (lb),…` below a
/// scale app's rows): at least two cells, none of them a date or a number, and one naming a
/// column of ours other than the date. A row of one field (the other export used another
/// delimiter) is split at the comma, semicolon or tab that gives it the most cells. Returns the
/// line as written (its cells trimmed) and the first cell naming a column of ours.
fn other_export_header(
    rec: &csv::StringRecord,
    delimiter: u8,
    spec: &FileSpec,
    opts: &CsvOptions,
) -> Option<(String, String)> {
    let (fields, as_written): (Vec<&str>, String) = if rec.len() == 1 {
        let f = rec.get(0)?;
        let fields = [',', ';', '\t']
            .iter()
            .map(|&d| f.split(d).collect::<Vec<_>>())
            .max_by_key(Vec::len)?;
        (fields, f.trim().to_string())
    } else {
        let fields: Vec<&str> = rec.iter().collect();
        let joined = fields
            .iter()
            .map(|f| f.trim())
            .collect::<Vec<_>>()
            .join(&(delimiter as char).to_string());
        (fields, joined)
    };
    let cells: Vec<String> = fields
        .iter()
        .map(|f| f.trim().to_string())
        .filter(|f| !f.is_empty())
        .collect();
    if cells.len() < 2
        || cells
            .iter()
            .any(|c| parse_when(c, opts).is_some() || parse_decimal(c).is_ok())
    {
        return None;
    }
    let named = cells
        .iter()
        .find(|c| column_named(c, spec, opts).is_some_and(|col| col != "date"))?
        .clone();
    Some((as_written, named))
}

/// Where unquoted delimiters inside a text value (`walk, brisk`, `Toast, buttered`, `walk,
/// brisk, uphill`) split a row of `extra` fields too many: the 0-based index of the field the
/// text starts in, when `extra + 1` neighbouring fields are all text (a letter, and neither a
/// number nor a date) and each after the first starts with a space (`, brisk`, as people write
/// a comma in text; `kg,clinic` is two values), the only such run in the row. Two commas in a
/// label had no run of two fields to find, and the row got the generic "row has 6 fields but
/// the header has 4" where one comma named the value and its field.
fn split_text_at(rec: &csv::StringRecord, extra: usize, opts: &CsvOptions) -> Option<usize> {
    let text = |f: &str| {
        let t = f.trim();
        t.chars().any(char::is_alphabetic)
            && numeric_parts(t).is_none()
            && parse_when(t, opts).is_none()
    };
    if extra == 0 {
        return None;
    }
    let runs: Vec<usize> = (0..rec.len().saturating_sub(extra))
        .filter(|&i| {
            text(&rec[i]) && (i + 1..=i + extra).all(|j| rec[j].starts_with(' ') && text(&rec[j]))
        })
        .collect();
    match runs[..] {
        [i] => Some(i),
        _ => None,
    }
}

/// Our columns whose values are numbers (a leading digit: `72.5`, `72.5 kg`, `1,234`).
const NUMBER_COLUMNS: &[&str] = &[
    "weight",
    "kcal",
    "carbs_g",
    "fat_g",
    "protein_g",
    "free_sugars_g",
    "minutes",
    "met",
    "steps",
    "value",
];

/// Whether `v` could be a value of our column `col` as far as a shifted row tells: a date where
/// a date goes, a number (a leading digit) where a number goes, a time (digits and `:`), a
/// unit without digits; any text in a text column (`activity`, `source`, …) or a column not
/// read (`None`). An empty value fits anywhere.
fn fits_column(col: Option<&str>, v: &str, opts: &CsvOptions) -> bool {
    let v = v.trim();
    let digit_first = |t: &str| {
        t.trim_start_matches(['-', '+', '.'])
            .starts_with(|c: char| c.is_ascii_digit())
    };
    match col {
        _ if v.is_empty() => true,
        Some("date") => parse_when(v, opts).is_some() || numeric_parts(v).is_some(),
        Some("time") => digit_first(v) && v.contains(':'),
        Some("unit") => !v.chars().any(|c| c.is_ascii_digit()),
        Some("attended") => !digit_first(v),
        Some(c) if NUMBER_COLUMNS.contains(&c) => digit_first(v),
        _ => true,
    }
}

/// Text as the comma rules see it: a letter, and neither a numeric date nor a date.
fn is_text_value(t: &str, opts: &CsvOptions) -> bool {
    let t = t.trim();
    t.chars().any(char::is_alphabetic)
        && numeric_parts(t).is_none()
        && parse_when(t, opts).is_none()
}

/// Where an unquoted delimiter splits a row of one field too many when no space after it tells
/// (`2026-03-02,walk,brisk,30` under `date,activity,minutes`; `2026-03-02,1,234,80` under
/// `date,kcal,protein_g`): the 0-based index of the first of the two fields that, joined, give
/// a row every field of which fits its column ([`fits_column`]), when only one join does. The
/// two fields must be a value the delimiter can be inside: two texts in a text column, or a
/// number's thousands (`1` and `234`: 1 to 3 digits, then exactly 3) in a number column.
/// `cols` names our column at each position of the header (`None`: not read).
fn split_by_reading(
    rec: &csv::StringRecord,
    cols: &[Option<&'static str>],
    opts: &CsvOptions,
) -> Option<usize> {
    let digits = |t: &str, n: std::ops::RangeInclusive<usize>| {
        n.contains(&t.len()) && t.bytes().all(|c| c.is_ascii_digit())
    };
    let joinable = |i: usize| {
        let (a, b) = (rec[i].trim(), rec[i + 1].trim());
        match cols.get(i).copied().flatten() {
            Some(c) if NUMBER_COLUMNS.contains(&c) => digits(a, 1..=3) && digits(b, 3..=3),
            None | Some("activity" | "source" | "session" | "test") => {
                is_text_value(a, opts) && is_text_value(b, opts)
            }
            _ => false,
        }
    };
    let reads = |i: usize| {
        (0..cols.len()).all(|j| {
            let v = if j < i {
                &rec[j]
            } else if j == i {
                ""
            } else {
                &rec[j + 1]
            };
            fits_column(cols[j], v, opts)
        })
    };
    let found: Vec<usize> = (0..rec.len().saturating_sub(1))
        .filter(|&i| i < cols.len() && joinable(i) && reads(i))
        .collect();
    match found[..] {
        [i] => Some(i),
        _ => None,
    }
}

/// A row as a shape warning's `found` gives it: its number of fields and its first fields
/// joined by the file's delimiter (cut at 200 characters).
fn row_as_found(rec: &csv::StringRecord, delimiter: &str) -> String {
    format!(
        "{}: `{}`",
        fields(rec.len()),
        shorten(
            &rec.iter()
                .take(MAX_CSV_COLUMNS + 1)
                .map(str::trim)
                .collect::<Vec<_>>()
                .join(delimiter),
            200
        )
    )
}

/// The warning for a row of fields too many whose extra fields are a text value split by
/// unquoted delimiters from field `i` (0-based): the line and the field where the value is,
/// and how to write the value.
fn split_text_warning(
    ctx: &FileCtx,
    rec: &csv::StringRecord,
    i: usize,
    line: u64,
    width: usize,
    header: Option<&str>,
    delimiter: u8,
) -> Diagnostic {
    let d = char::from(delimiter);
    let extra = rec.len().saturating_sub(width).max(1);
    let mut joined = rec[i].trim().to_string();
    for f in rec.iter().skip(i + 1).take(extra) {
        joined.push(d);
        joined.push_str(f.trim_end());
    }
    let column = header.map_or_else(|| format!("field {}", i + 1), |h| format!("`{h}`"));
    let (too_many, delimiters) = if extra == 1 {
        (
            "one field too many".to_string(),
            format!(
                "the `{d}` in {column} value `{joined}` (field {}) is read as a delimiter",
                i + 1
            ),
        )
    } else {
        let n = number_word(extra);
        (
            format!("{n} fields too many"),
            format!(
                "the {n} `{d}` in {column} value `{joined}` (field {}) are read as delimiters",
                i + 1
            ),
        )
    };
    let mut w = ctx
        .warning(format!(
            "row has {too_many} ({} for the {width} columns of the header): {delimiters}; the row is dropped",
            rec.len(),
        ))
        .at(line, Some(i as u64 + 1))
        .expected(fields(width))
        .found(row_as_found(rec, &d.to_string()))
        .hint(format!(
            "quote the value: `\"{joined}\"` (or write it without the `{d}`)"
        ));
    if let Some(h) = header {
        w = w.field(h);
    }
    w
}

/// `two` … `nine`, then digits: how many delimiters a warning counts in one value.
fn number_word(n: usize) -> String {
    const WORDS: [&str; 8] = [
        "two", "three", "four", "five", "six", "seven", "eight", "nine",
    ];
    match n {
        2..=9 => WORDS[n - 2].to_string(),
        _ => n.to_string(),
    }
}

/// `1 field`, `4 fields` ("row has 1 fields" read as a slip of ours).
fn fields(n: usize) -> String {
    if n == 1 {
        "1 field".to_string()
    } else {
        format!("{n} fields")
    }
}

fn column_list(spec: &FileSpec) -> String {
    let mut s = spec.required.join(", ");
    if !spec.optional.is_empty() {
        s.push_str(&format!(" (optional: {})", spec.optional.join(", ")));
    }
    s
}

/// A date as read from a cell: the local day, with the time of day when one was written.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct When {
    /// The local day of the measurement.
    pub date: NaiveDate,
    /// The local time of day, when written.
    pub time: Option<NaiveTime>,
    /// Whether a UTC time was converted to `input.time_zone`, or left on its UTC day.
    pub from_utc: bool,
}

/// ISO-8601 date-times without an offset, tried after the program's format.
const ISO_NAIVE: [&str; 6] = [
    "%Y-%m-%dT%H:%M:%S%.f",
    "%Y-%m-%d %H:%M:%S%.f",
    "%Y-%m-%dT%H:%M",
    "%Y-%m-%d %H:%M",
    // An ISO date with a 12-hour clock (`2026-05-01 7:12 AM`), as spreadsheets show it.
    "%Y-%m-%d %I:%M %p",
    "%Y-%m-%d %I:%M:%S %p",
];
/// ISO-8601 date-times with an offset (`+01:00`, `+0100`); `Z` is read as `+00:00`.
const ISO_OFFSET: [&str; 5] = [
    "%Y-%m-%dT%H:%M:%S%.f%#z",
    "%Y-%m-%d %H:%M:%S%.f%#z",
    // With a space before the offset, as phone health apps write it.
    "%Y-%m-%d %H:%M:%S %#z",
    "%Y-%m-%dT%H:%M%#z",
    "%Y-%m-%d %H:%M%#z",
];

/// Reads a date cell: a date in `input.date_format` (which may hold a time and an offset), or
/// an ISO-8601 date or date-time with or without an offset.
///
/// The day of a measurement is its local day: a time with an offset other than UTC is taken on
/// the day it was written (the offset is the measuring device's local one); a UTC time (`Z`,
/// `+00:00`) is converted to `input.time_zone` when set (and otherwise kept on its UTC day); a
/// time without an offset is local time already.
pub fn parse_when(s: &str, opts: &CsvOptions) -> Option<When> {
    let s = s.trim();
    let format = opts.date_format.as_str();
    if format == "%Y-%m-%d"
        && let Some(d) = iso_date(s)
    {
        return Some(When {
            date: d,
            time: None,
            from_utc: false,
        });
    }
    let local = |dt: NaiveDateTime| When {
        date: dt.date(),
        time: Some(dt.time()),
        from_utc: false,
    };
    let stamped = |t: DateTime<FixedOffset>| {
        if t.offset().fix().local_minus_utc() == 0 {
            let dt = match &opts.time_zone {
                Some(z) => z.local(t),
                None => t.naive_local(),
            };
            When {
                from_utc: true,
                ..local(dt)
            }
        } else {
            local(t.naive_local())
        }
    };
    let zulu = zulu(s);
    let with_offset = zulu.as_deref().unwrap_or(s);
    let has_time = format.contains("%H")
        || format.contains("%I")
        || format.contains("%T")
        || format.contains("%R");
    // chrono's `%Y` reads any number of digits: `26-04-03` was the year 26 (and `03-04-26` the
    // year 3), every row dropped as "before enrolment". A year under 1000 is no such reading;
    // the date is left to the two-digit-year readings ([`numeric_order`]).
    let full = |d: NaiveDate| !format.contains("%Y") || d.year() >= 1000;
    if has_time {
        if let Ok(t) = DateTime::parse_from_str(with_offset, format)
            && full(t.date_naive())
        {
            return Some(stamped(t));
        }
        if let Ok(dt) = NaiveDateTime::parse_from_str(s, format)
            && full(dt.date())
        {
            return Some(local(dt));
        }
    } else if let Ok(d) = NaiveDate::parse_from_str(s, format)
        && full(d)
    {
        return Some(When {
            date: d,
            time: None,
            from_utc: false,
        });
    }
    // ISO 8601, whatever the program's format.
    if s.len() >= 10 && s.as_bytes()[4] == b'-' {
        if let Some(d) = iso_date(s) {
            return Some(When {
                date: d,
                time: None,
                from_utc: false,
            });
        }
        for f in ISO_OFFSET {
            if let Ok(t) = DateTime::parse_from_str(with_offset, f) {
                return Some(stamped(t));
            }
        }
        for f in ISO_NAIVE {
            if let Ok(dt) = NaiveDateTime::parse_from_str(s, f) {
                return Some(local(dt));
            }
        }
    }
    // The date-time of e-mail headers (`Fri, 01 May 2026 07:12:00 +0200`, RFC 5322 §3.3), as
    // some servers' exports write it.
    if let Ok(t) = DateTime::parse_from_rfc2822(s) {
        return Some(stamped(t));
    }
    if let Some(d) = basic_date(s, opts.program_span) {
        return Some(When {
            date: d,
            time: None,
            from_utc: false,
        });
    }
    written_out(s, format == "%Y-%m-%d", opts.program_span).map(|(date, time)| When {
        date,
        time,
        from_utc: false,
    })
}

/// `s` with `Z`, or the word `UTC` or `GMT` after the time (`2026-05-01 07:12:00 UTC`, as
/// databases and some app exports write it: every such row was dropped as an unreadable date),
/// written as the offset `+00:00`; `None` when it has neither.
fn zulu(s: &str) -> Option<String> {
    let utc_word = |w: &str| {
        s.len()
            .checked_sub(w.len())
            .filter(|&i| s.is_char_boundary(i) && s[i..].eq_ignore_ascii_case(w))
            .map(|i| &s[..i])
    };
    s.strip_suffix(['Z', 'z'])
        .or_else(|| utc_word(" UTC"))
        .or_else(|| utc_word(" GMT"))
        .map(|t| format!("{}+00:00", t.trim_end()))
}

/// The instant a date-time written with its offset (or `Z`, `UTC`, `GMT`) names, in the
/// program's format, ISO 8601 or the e-mail form; `None` for one without an offset.
fn written_instant(s: &str, opts: &CsvOptions) -> Option<DateTime<FixedOffset>> {
    let s = s.trim();
    let zulu = zulu(s);
    let with_offset = zulu.as_deref().unwrap_or(s);
    std::iter::once(opts.date_format.as_str())
        .chain(ISO_OFFSET)
        .find_map(|f| DateTime::parse_from_str(with_offset, f).ok())
        .or_else(|| DateTime::parse_from_rfc2822(s).ok())
}

/// A date in ISO 8601's basic format (`20260501`, ISO 8601-1:2019 §5.2.2.1), as some devices
/// and databases export it: every such row was dropped as an unreadable date. Only a date within
/// `span` give or take [`SERIAL_DATE_MARGIN_DAYS`] (as for serial dates) and none without one:
/// eight digits in a date column are hardly anything else, but a number far from the program
/// is no date of it.
fn basic_date(s: &str, span: Option<(NaiveDate, NaiveDate)>) -> Option<NaiveDate> {
    let b = s.as_bytes();
    if b.len() != 8 || !b.iter().all(u8::is_ascii_digit) {
        return None;
    }
    let (start, end) = span?;
    let num = |r: std::ops::Range<usize>| s[r].parse::<u32>().ok();
    let d = NaiveDate::from_ymd_opt(i32::try_from(num(0..4)?).ok()?, num(4..6)?, num(6..8)?)?;
    let margin = chrono::Duration::days(SERIAL_DATE_MARGIN_DAYS);
    (d >= start - margin && d <= end + margin).then_some(d)
}

/// Dates as apps and spreadsheets write them out, whatever the program's format, each with one
/// reading only: the month by name (`May 1, 2026`, `1 May 2026`, `1-May-2026`), year first with
/// slashes (`2026/05/01`) and, when the program has not set a day-and-month format of its own
/// (`day_first_dots`), day first with dots (`01.05.2026`, the dotted form of the countries that
/// write it, always day first: common practice; a file whose dotted dates turn out month first
/// is refused, see [`dotted_month_first`]). A time may follow (`07:12`, `07:12:30`, `7:12 AM`).
///
/// A two-digit year (`1-May-26`, as spreadsheets write `d-mmm-yy`) is read in the one century
/// that puts the date within `span` (give or take [`SERIAL_DATE_MARGIN_DAYS`], as for numeric
/// dates), and not at all without one; `%Y` alone had read it as the year 26.
fn written_out(
    s: &str,
    day_first_dots: bool,
    span: Option<(NaiveDate, NaiveDate)>,
) -> Option<(NaiveDate, Option<NaiveTime>)> {
    const NAMED: [&str; 15] = [
        "%B %d, %Y",
        "%b %d, %Y",
        "%B %d %Y",
        "%b %d %Y",
        "%d %B %Y",
        "%d %b %Y",
        "%d-%b-%Y",
        // With the weekday, which must be the date's (`Fri, May 1, 2026`).
        "%a, %b %d, %Y",
        "%A, %B %d, %Y",
        "%a, %d %b %Y",
        "%A, %d %B %Y",
        // Without a comma (`Fri May 01 2026`, as scripts' date-to-text functions write it).
        "%a %b %d %Y",
        "%A %B %d %Y",
        // Day first without a comma (`Fri 1 May 2026`, as diaries and calendars write it).
        "%a %d %b %Y",
        "%A %d %B %Y",
    ];
    const TIMES: [&str; 4] = ["%H:%M", "%H:%M:%S", "%I:%M %p", "%I:%M:%S %p"];
    // The month's name is a word of three letters or more (`AM`, `PM` are not).
    // (Only a word that starts like a month is tried: a file of summary rows or other words
    // is not run through every form.)
    const MONTHS: [&str; 12] = [
        "jan", "feb", "mar", "apr", "may", "jun", "jul", "aug", "sep", "oct", "nov", "dec",
    ];
    let named = s.split([' ', ',', '-']).any(|w| {
        w.len() >= 3
            && w.chars().all(|c| c.is_ascii_alphabetic())
            && MONTHS.iter().any(|m| w[..3].eq_ignore_ascii_case(m))
    });
    let b = s.as_bytes();
    let dates: &[&str] = if named {
        &NAMED
    } else if b.len() >= 10 && b[4] == b'/' {
        &["%Y/%m/%d"]
    } else if b.len() >= 10 && b[4] == b'.' && b[7] == b'.' {
        // Year first with dots (`2026.05.01`, common practice in several countries): a
        // four-digit year first leaves only one reading.
        &["%Y.%m.%d"]
    } else if day_first_dots && b.len() >= 10 && b[2] == b'.' && b[5] == b'.' {
        &["%d.%m.%Y"]
    } else {
        return None;
    };
    // `%Y` reads `1 May 26` as the year 26.
    // (A weekday was checked against the year 26: such a date is not placed.)
    let full = |d: NaiveDate, f: &str| -> Option<NaiveDate> {
        if d.year() >= 1000 {
            return Some(d);
        }
        if !named || d.year() >= 100 || f.contains("%a") || f.contains("%A") {
            return None;
        }
        let (start, end) = span?;
        let margin = chrono::Duration::days(SERIAL_DATE_MARGIN_DAYS);
        let mut fits = (start.year() / 100 - 1..=end.year() / 100 + 1)
            .filter_map(|c| d.with_year(c * 100 + d.year()))
            .filter(|x| *x >= start - margin && *x <= end + margin);
        match (fits.next(), fits.next()) {
            (Some(x), None) => Some(x),
            _ => None,
        }
    };
    for f in dates {
        if let Ok(d) = NaiveDate::parse_from_str(s, f) {
            return full(d, f).map(|d| (d, None));
        }
        for sep in [" ", ", "] {
            for t in TIMES {
                if let Ok(dt) = NaiveDateTime::parse_from_str(s, &format!("{f}{sep}{t}")) {
                    return full(dt.date(), f).map(|d| (d, Some(dt.time())));
                }
            }
        }
    }
    None
}

/// Which comes first in a file's numeric dates written with slashes or dashes (`13/05/2026`,
/// `05-13-2026`), for a program that has not set `input.date_format`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum NumericOrder {
    /// Day, month, year.
    DayFirst,
    /// Month, day, year.
    MonthFirst,
    /// Two-digit year, month, day (`26-05-13`), as some devices write it.
    YearFirst,
}

impl NumericOrder {
    const ALL: [NumericOrder; 3] = [
        NumericOrder::DayFirst,
        NumericOrder::MonthFirst,
        NumericOrder::YearFirst,
    ];

    fn words(self) -> &'static str {
        match self {
            NumericOrder::DayFirst => "day first",
            NumericOrder::MonthFirst => "month first",
            NumericOrder::YearFirst => "year first",
        }
    }

    /// The `input.date_format` that reads this order with two-digit years.
    fn short_format(self, sep: char) -> String {
        match self {
            NumericOrder::DayFirst => format!("%d{sep}%m{sep}%y"),
            NumericOrder::MonthFirst => format!("%m{sep}%d{sep}%y"),
            NumericOrder::YearFirst => format!("%y{sep}%m{sep}%d"),
        }
    }
}

/// The order of a file's numeric dates, the file's own date that tells it (none when every
/// numeric date of the file lies after a withdrawal of consent: none of them is quoted), and how
/// many of its dates read only the other way round (each costs its row).
type NumericReading = (NumericOrder, Option<(String, NaiveDate)>, usize);

/// The first number, the second, the last (the year unless year first), the separator of a
/// numeric date, and whether the last was written with one or two digits (`05/01/26`).
type NumericParts = (u32, u32, i32, char, bool);

/// The date of numeric parts read in `order`. A two-digit year is read in the one century that
/// puts the date within the program (give or take [`SERIAL_DATE_MARGIN_DAYS`], as serial
/// dates), and not at all without a program span: `26` alone could be 1926 or 2026.
fn place(
    (a, b, y, _, short): NumericParts,
    order: NumericOrder,
    span: Option<(NaiveDate, NaiveDate)>,
) -> Option<NaiveDate> {
    let (day, month, y) = match order {
        NumericOrder::DayFirst => (a, b, y),
        NumericOrder::MonthFirst => (b, a, y),
        // A two-digit year first, the day last: only with a short last part.
        NumericOrder::YearFirst if short => (u32::try_from(y).ok()?, b, i32::try_from(a).ok()?),
        NumericOrder::YearFirst => return None,
    };
    if !short {
        return NaiveDate::from_ymd_opt(y, month, day);
    }
    let (start, end) = span?;
    let margin = chrono::Duration::days(SERIAL_DATE_MARGIN_DAYS);
    let mut fits = (start.year() / 100 - 1..=end.year() / 100 + 1)
        .filter_map(|c| NaiveDate::from_ymd_opt(c * 100 + y, month, day))
        .filter(|d| *d >= start - margin && *d <= end + margin);
    match (fits.next(), fits.next()) {
        (Some(d), None) => Some(d),
        _ => None,
    }
}

/// The (first, second, last, separator, short last part) of `dd/mm/yyyy`-like text (one or two
/// digits for the first two, slashes or dashes, a last part of four digits, or of one or two
/// (`26-4-3` is year first)), before any time.
fn numeric_parts(s: &str) -> Option<NumericParts> {
    let day = s.split([' ', 'T']).next()?;
    let sep = if day.contains('/') { '/' } else { '-' };
    let parts: Vec<&str> = day.split(sep).collect();
    let [a, b, y] = parts.as_slice() else {
        return None;
    };
    let digits = |t: &str, n: std::ops::RangeInclusive<usize>| {
        n.contains(&t.len()) && t.bytes().all(|c| c.is_ascii_digit())
    };
    if !(digits(a, 1..=2) && digits(b, 1..=2) && (digits(y, 4..=4) || digits(y, 1..=2))) {
        return None;
    }
    Some((
        a.parse().ok()?,
        b.parse().ok()?,
        y.parse().ok()?,
        sep,
        y.len() <= 2,
    ))
}

/// Whether `s`, a numeric date such as `14/04/2026` that no order found for its file reads,
/// lies after `x` in every reading of it (day, month or year first; none, when no reading
/// places it): the row is dated after a withdrawal of consent on `x` whatever the order, and
/// is not read, as a row whose date reads after it. Only with the default `input.date_format`
/// (numeric dates are read by their order only then).
pub(crate) fn numeric_date_after(s: &str, opts: &CsvOptions, x: NaiveDate) -> bool {
    opts.date_format == "%Y-%m-%d"
        && numeric_parts(s).is_some_and(|p| {
            let mut readings = NumericOrder::ALL
                .iter()
                .filter_map(|o| place(p, *o, opts.program_span))
                .peekable();
            readings.peek().is_some() && readings.all(|d| d > x)
        })
}

/// The order of a file's numeric dates (see [`NumericOrder`]): the one that reads every one of
/// them as a real date, when only one does (a date such as `13/05/2026` tells). When both do
/// (every day is the 12th or before), the dates cannot be read without a guess and the file is
/// refused at the first; when neither does, each date that does not read is warned about.
fn numeric_order(
    table: &Table,
    opts: &CsvOptions,
    ctx: &FileCtx,
) -> Result<Option<NumericReading>, Box<Diagnostic>> {
    if opts.date_format != "%Y-%m-%d" {
        return Ok(None);
    }
    let span = opts.program_span;
    // A row dated after a withdrawal of consent in every reading of its date is not read,
    // whatever the order, so it does not decide how the rows before it are read either: one
    // synced weigh-in on `13/11/2026` told the order of a whole file of earlier dates that did
    // not. A row that some reading puts on or before the withdrawal may be one of the person's
    // own, and takes part as it would had the later rows never been synced (taking it out too
    // turned a withdrawal near the start into no date to decide by, and the file's rows, those
    // after the withdrawal among them, were each warned about as unreadable, quoted).
    let after_consent = |s: &str| {
        ctx.consent_withdrawn
            .is_some_and(|x| match parse_when(s, opts) {
                Some(w) => w.date > x,
                None => numeric_date_after(s, opts, x),
            })
    };
    let numeric: Vec<(&Row, &str, NumericParts)> = table
        .rows
        .iter()
        .filter_map(|r| {
            let s = table.get(r, "date")?;
            Some((r, s, numeric_parts(s)?))
        })
        .filter(|(_, s, _)| parse_when(s, opts).is_none())
        .collect();
    // A date with a four-digit year that no order reads (`31/04/2026`: 31 April is no day, and
    // there is no month 31) is a typo that tells nothing of the order. It took part, so no
    // order read every date, and then every numeric date of the file was unreadable: one typo
    // cost the file. The other dates decide; it costs its own row, warned about at its cell.
    let impossible = |p: &NumericParts| {
        !p.4 && NumericOrder::ALL
            .iter()
            .all(|o| place(*p, *o, span).is_none())
    };
    let all_dates: Vec<(&Row, &str, NumericParts)> = numeric
        .iter()
        .filter(|(_, s, _)| !after_consent(s))
        .copied()
        .collect();
    let dates: Vec<(&Row, &str, NumericParts)> = if all_dates.iter().all(|(_, _, p)| impossible(p))
    {
        all_dates
    } else {
        all_dates
            .into_iter()
            .filter(|(_, _, p)| !impossible(p))
            .collect()
    };
    let Some(&(first_row, first, _)) = dates.first() else {
        // Every numeric date lies after the withdrawal in each of its readings: an order that
        // reads them all lets the rows be left out as dated after it, like ISO-dated ones,
        // instead of each being warned about (and quoted) as an unreadable date. No date of
        // theirs is given as the example of the order.
        return Ok(NumericOrder::ALL
            .into_iter()
            .find(|o| {
                numeric
                    .iter()
                    .all(|(_, _, p)| place(*p, *o, span).is_some())
            })
            .map(|o| (o, None, 0)));
    };
    // The orders that read every such date; orders that give every one the same date (`05/05/26`
    // either way, `26-05-26` year or day first in 2026) are one reading.
    let mut fitting: Vec<NumericOrder> = Vec::new();
    for order in NumericOrder::ALL {
        let dates_of = |o: NumericOrder| {
            dates
                .iter()
                .map(|(_, _, p)| place(*p, o, span))
                .collect::<Option<Vec<NaiveDate>>>()
        };
        let Some(these) = dates_of(order) else {
            continue;
        };
        if fitting
            .iter()
            .all(|o| dates_of(*o).as_ref() != Some(&these))
        {
            fitting.push(order);
        }
    }
    let dated = table
        .rows
        .iter()
        .filter(|r| {
            table.get(r, "date").is_some_and(|s| {
                !after_consent(s)
                    && (parse_when(s, opts).is_some()
                        || numeric_parts(s).is_none_or(|p| !impossible(&p))
                        || dates.iter().any(|(_, _, q)| impossible(q)))
            })
        })
        .count();
    let short = dates.iter().any(|(_, _, p)| p.4);
    let within = match span {
        Some((a, b)) => {
            format!("within the program ({a} to {b}, give or take {SERIAL_DATE_MARGIN_DAYS} days)")
        }
        None => "within the program".to_string(),
    };
    let sep = dates[0].2.3;
    match fitting.as_slice() {
        [one] => {
            // The first date that no other order reads (it tells the order).
            let at = |p: NumericParts, o: NumericOrder| place(p, o, span);
            let (_, written, parts) = dates
                .iter()
                .find(|(_, _, p)| {
                    NumericOrder::ALL
                        .iter()
                        .filter(|o| *o != one)
                        .all(|o| at(*p, *o).is_none_or(|d| Some(d) == at(*p, *one)))
                })
                .unwrap_or(&dates[0]);
            let date = at(*parts, *one).expect("the one order reads every such date");
            Ok(Some((*one, Some(((*written).to_string(), date)), 0)))
        }
        // Two-digit years that no one order puts within the program, in a file of such dates:
        // which dates they are cannot be told, and dropping every row one by one would hide
        // it. Refused at the first date that gives it away.
        [] if short && dates.len() == dated => {
            let unplaced = dates.iter().find(|(_, _, p)| {
                NumericOrder::ALL
                    .iter()
                    .all(|o| place(*p, *o, span).is_none())
            });
            let (row, found, why) = match unplaced {
                Some((r, s, _)) => (
                    *r,
                    *s,
                    format!(
                        "read day, month or year first, in any century, `{s}` is no date {within}"
                    ),
                ),
                None => (
                    first_row,
                    first,
                    format!(
                        "no one order (day, month or year first) puts every date of the file {within}"
                    ),
                ),
            };
            Err(Box::new(
                ctx.error(format!(
                    "the dates have two-digit years, and {why}, so which dates they are cannot be told; the file is not used"
                ))
                .at(row.line, table.column("date"))
                .field("date")
                .expected(format!("dates with four-digit years (`2026-05-01`), or two-digit years that fall {within} in one reading only"))
                .found(format!("`{found}`"))
                .hint(format!(
                    "export the dates with four-digit years (or as ISO 8601), or set `input.date_format: \"{}\"`, `\"{}\"` or `\"{}\"` in program.yaml",
                    NumericOrder::DayFirst.short_format(sep),
                    NumericOrder::MonthFirst.short_format(sep),
                    NumericOrder::YearFirst.short_format(sep)
                )),
            ))
        }
        // No order reads every date, four-digit years: nine in ten or more (common practice,
        // as for a date column found by its cells) of the dates that read one way only read
        // the same way (`10/13/2026` … month first), and the others only the other way round
        // (`15/10/2026`: a date typed day first, or a slip). The
        // file is read in the order of the nine in ten; each date written the other way costs
        // its row, warned about at its cell. One such date made no order read every date, and
        // every row of a US export was dropped as an "unreadable date" that named none of
        // this. Dates that read both ways are read in the file's order, as in a file without
        // the slip. When the dates that tell are split more evenly (two people's habits in one
        // sheet), nothing is read on a guess: each date that does not read is warned about.
        [] if !short => {
            let only = |o: NumericOrder| {
                dates
                    .iter()
                    .filter(|(_, _, p)| {
                        place(*p, o, span).is_some()
                            && NumericOrder::ALL
                                .iter()
                                .filter(|x| **x != o)
                                .all(|x| place(*p, *x, span).is_none())
                    })
                    .collect::<Vec<_>>()
            };
            let (day, month) = (only(NumericOrder::DayFirst), only(NumericOrder::MonthFirst));
            let (order, telling, against) = if day.len() >= month.len() {
                (NumericOrder::DayFirst, day, month.len())
            } else {
                (NumericOrder::MonthFirst, month, day.len())
            };
            if telling.len() * 10 < (telling.len() + against) * 9 {
                return Ok(None);
            }
            let (_, written, parts) = telling[0];
            let date = place(*parts, order, span).expect("it reads in this order");
            Ok(Some((order, Some(((*written).to_string(), date)), against)))
        }
        [] => Ok(None),
        // Among other dates, the few that cannot be told are warned about one by one.
        _ if dates.len() < dated => Ok(None),
        [a, b, ..] if short && (*a == NumericOrder::YearFirst || *b == NumericOrder::YearFirst) => {
            // The first date the two readings put on different days.
            let (row, found, da, db) = dates
                .iter()
                .find_map(|(r, s, p)| {
                    let (da, db) = (place(*p, *a, span)?, place(*p, *b, span)?);
                    (da != db).then_some((*r, *s, da, db))
                })
                .expect("two readings that differ differ at some date");
            Err(Box::new(
                ctx.error(format!(
                    "the dates have two-digit years and read within the program in more than one order: `{found}` is {da} read {} and {db} read {}, so its dates cannot be read without a guess; the file is not used",
                    a.words(),
                    b.words()
                ))
                .at(row.line, table.column("date"))
                .field("date")
                .expected("dates with four-digit years (`2026-05-01`), or the order set in program.yaml")
                .found(format!("`{found}`"))
                .hint(format!(
                    "export the dates with four-digit years (or as ISO 8601), or set `input.date_format: \"{}\"` ({}) or `\"{}\"` ({}) in program.yaml",
                    a.short_format(sep),
                    a.words(),
                    b.short_format(sep),
                    b.words()
                )),
            ))
        }
        _ => {
            let year = if short { "%y" } else { "%Y" };
            Err(Box::new(
                ctx.error(format!(
                    "no date of the file tells whether its day or its month comes first (`{first}`: every day is the 12th or before), so its dates cannot be read without a guess; the file is not used"
                ))
                .at(first_row.line, table.column("date"))
                .field("date")
                .expected("ISO 8601 dates (`2026-05-01`), or the order set in program.yaml")
                .found(format!("`{first}`"))
                .hint(format!(
                    "set `input.date_format: \"%d{sep}%m{sep}{year}\"` (day first) or `\"%m{sep}%d{sep}{year}\"` (month first) in program.yaml, or export the dates as ISO 8601"
                )),
            ))
        }
    }
}

/// A file whose dotted dates are month first (`05.13.2026`): read day first (see
/// [`written_out`]) its dates up to the 12th would be on the wrong day, so it is refused at the
/// first date that shows it.
fn dotted_month_first(table: &Table, opts: &CsvOptions, ctx: &FileCtx) -> Option<Diagnostic> {
    if opts.date_format != "%Y-%m-%d" {
        return None;
    }
    let row = table.rows.iter().find(|r| {
        table.get(r, "date").is_some_and(|s| {
            let day = s.split(' ').next().unwrap_or(s);
            day.len() == 10
                && day.as_bytes()[2] == b'.'
                && NaiveDate::parse_from_str(day, "%d.%m.%Y").is_err()
                && NaiveDate::parse_from_str(day, "%m.%d.%Y").is_ok()
        })
    })?;
    // Only a file with a dotted date that reads both ways, differently, would be misread; a
    // lone month-first date is warned about as unreadable.
    let both_ways = |r: &&Row| {
        table.get(r, "date").is_some_and(|s| {
            let day = s.split(' ').next().unwrap_or(s);
            day.len() == 10
                && day.as_bytes()[2] == b'.'
                && day[..2] != day[3..5]
                && NaiveDate::parse_from_str(day, "%d.%m.%Y").is_ok()
                && NaiveDate::parse_from_str(day, "%m.%d.%Y").is_ok()
        })
    };
    table.rows.iter().find(both_ways)?;
    let found = table.get(row, "date").unwrap_or("");
    Some(
        ctx.error(format!(
            "the dotted dates are written month first (line {}'s `{found}` has no 13th month), so those up to the 12th cannot be read as day first; the file is not used",
            row.line
        ))
        .at(row.line, table.column("date"))
        .field("date")
        .expected("dotted dates day first (`13.05.2026`), or ISO 8601 dates (`2026-05-13`)")
        .found(format!("`{found}`"))
        .hint("if every file of the program writes dates month first with dots, set `input.date_format: \"%m.%d.%Y\"` in program.yaml"),
    )
}

/// `NaiveDate::parse_from_str(s, format)`, with the common ISO form `YYYY-MM-DD` read directly
/// (chrono interprets the format string on every call, which was a noticeable part of loading).
/// The direct path only accepts what chrono accepts with `%Y-%m-%d` and gives the same date;
/// anything else goes to chrono, so errors are chrono's.
pub fn parse_date(s: &str, format: &str) -> chrono::ParseResult<NaiveDate> {
    if format == "%Y-%m-%d"
        && let Some(d) = iso_date(s)
    {
        return Ok(d);
    }
    NaiveDate::parse_from_str(s, format)
}

fn iso_date(s: &str) -> Option<NaiveDate> {
    let b = s.as_bytes();
    if b.len() != 10 || b[4] != b'-' || b[7] != b'-' {
        return None;
    }
    let num = |r: std::ops::Range<usize>| -> Option<u32> {
        b[r].iter().try_fold(0u32, |acc, &c| {
            c.is_ascii_digit().then(|| acc * 10 + u32::from(c - b'0'))
        })
    };
    let (y, m, d) = (num(0..4)?, num(5..7)?, num(8..10)?);
    NaiveDate::from_ymd_opt(i32::try_from(y).ok()?, m, d)
}

/// Words of rows that sum up the others (a spreadsheet's `Average` row, a food diary's `Total`),
/// also as spreadsheets in other languages label them: German, French (`Moyenne`, `Somme`),
/// Spanish and Italian (`Promedio`, `Media`, `Suma`, `Totale`, `Somma`), Portuguese (`Média`,
/// `Soma`), Dutch (`Gemiddelde`, `Totaal`), Polish (`Średnia`, `Suma`) and the Scandinavian
/// languages (`Gennemsnit`, `Genomsnitt`, `Gjennomsnitt`, `Totalt`). A row labelled so
/// where its date would be was warned about as an unreadable date every month.
pub const SUMMARY_LABELS: [&str; 33] = [
    "total",
    "totals",
    "daily total",
    "sum",
    "average",
    "avg",
    "mean",
    "median",
    "min",
    "max",
    "minimum",
    "maximum",
    "summe",
    "gesamt",
    "durchschnitt",
    "mittelwert",
    "moyenne",
    "somme",
    "promedio",
    "media",
    "mediana",
    "suma",
    "totale",
    "somma",
    "média",
    "soma",
    "gemiddelde",
    "totaal",
    "średnia",
    "gennemsnit",
    "genomsnitt",
    "gjennomsnitt",
    "totalt",
];

/// The summary labels that are also values a column may hold (an effort's `Max`, a unit's
/// `min`): read as labels only in a column of no other words ([`Table::column_of_words`]).
const EXTREME_LABELS: [&str; 4] = ["min", "max", "minimum", "maximum"];

/// Whether `text` is one of `labels` (lowercase), whatever its case, spacing or final colon.
pub fn is_label(text: &str, labels: &[&str]) -> bool {
    let t = text.trim().trim_end_matches(':').trim().to_lowercase();
    let t = t.split_whitespace().collect::<Vec<_>>().join(" ");
    labels.contains(&t.as_str())
}

/// Whether `text`, where a row's date would be, labels a row that sums up the others: one of
/// [`SUMMARY_LABELS`], or a short phrase without digits that starts or ends with one (`Total
/// change`, `Weekly average`, `Grand total:`).
pub fn is_summary_date(text: &str) -> bool {
    if is_label(text, &SUMMARY_LABELS) {
        return true;
    }
    let t = text.trim().trim_end_matches(':').to_lowercase();
    let words: Vec<&str> = t.split_whitespace().collect();
    !t.chars().any(|c| c.is_ascii_digit())
        && (2..=4).contains(&words.len())
        && [words[0], words[words.len() - 1]]
            .iter()
            .any(|w| SUMMARY_LABELS.contains(w))
}

/// Whether `text` starts with a word of [`SUMMARY_LABELS`] standing alone (`Average: 88.15
/// kg`, `Total 510 kcal`, `Daily total: 1,840`), as a summary written in one field begins.
fn starts_as_summary(text: &str) -> bool {
    let t = text.to_lowercase();
    let words: Vec<&str> = t
        .split(|c: char| c.is_whitespace() || c == ':' || c == '=')
        .filter(|w| !w.is_empty())
        .collect();
    match words.as_slice() {
        ["daily", "total", ..] => true,
        [first, ..] => SUMMARY_LABELS.contains(first),
        [] => false,
    }
}

/// A bad value that was warned about and left out.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Dropped;

/// Reads cells of one row, pushing a warning for each bad value.
pub struct Cells<'a> {
    /// The table.
    pub table: &'a Table,
    /// The row.
    pub row: &'a Row,
    /// Diagnostics context.
    pub ctx: &'a FileCtx,
    /// Options (date format).
    pub opts: &'a CsvOptions,
}

impl Cells<'_> {
    /// A warning located at `col` of this row. On a row of fewer fields than the header, its
    /// hint says how a value left out before the column moves the rest: the sample's
    /// `2026-05-14,08:01,91.2,home-scale` under `date,time,weight,unit,source` read only
    /// "unknown weight unit … found: `home-scale`", beside a note that the row was "read with
    /// the missing values empty". A caller's own hint replaces it.
    pub fn warn(&self, col: &str, message: impl Into<String>) -> Diagnostic {
        let d = self
            .ctx
            .warning(message)
            .at(self.row.line, self.table.column(col))
            .field(col);
        // Only where the value reads as the next column's: a value that is just wrong on a
        // row that left off an optional value at its end (`lbx` before a missing `time`) keeps
        // the plain message.
        let shifted = || {
            let i = *self.table.columns.get(col)?;
            let v = self.table.field(self.row, i)?;
            let next = self
                .table
                .columns
                .iter()
                .find(|&(_, &k)| k == i + 1)
                .map(|(&c, _)| c);
            (i + 1 < self.table.width && fits_column(next, v, self.opts)).then_some(())
        };
        match self.row.short.filter(|_| shifted().is_some()) {
            Some(n) => d.hint(format!(
                "this row has {} where the header has {}: a value left out before `{col}`, with its delimiter, moves every value after it one column to the left; keep the delimiter of an empty value",
                fields(n),
                self.table.width
            )),
            None => d,
        }
    }

    /// Text of `col`, `None` when empty.
    pub fn text(&self, col: &str) -> Option<&str> {
        self.table.get(self.row, col)
    }

    /// A required text value; a warning when empty.
    pub fn required_text(&self, col: &str, diags: &mut Vec<Diagnostic>) -> Option<String> {
        match self.text(col) {
            Some(s) => Some(s.to_string()),
            None => {
                // Named like any dropped row, with what was expected and found (the column as
                // the file heads it, when that is another name).
                let headed = self
                    .table
                    .written_header(col)
                    .filter(|w| *w != col)
                    .map(|w| format!(" (the column headed `{w}`)"))
                    .unwrap_or_default();
                let index = self
                    .table
                    .column(col)
                    .and_then(|i| usize::try_from(i).ok()?.checked_sub(1));
                let found = match index {
                    Some(i)
                        if self
                            .table
                            .raw_field(self.row, i)
                            .is_some_and(|r| !r.is_empty()) =>
                    {
                        "a cell of spaces only"
                    }
                    _ => "an empty cell",
                };
                diags.push(
                    self.warn(col, format!("`{col}` is empty; the row is dropped"))
                        .expected(format!("a value in `{col}`{headed}"))
                        .found(found)
                        .hint("fill in the value or remove the row"),
                );
                None
            }
        }
    }

    /// A required date (see [`parse_when`]).
    pub fn date(&self, col: &str, diags: &mut Vec<Diagnostic>) -> Option<NaiveDate> {
        self.when(col, diags).map(|w| w.date)
    }

    /// A required date, with its time of day when one was written (see [`parse_when`]).
    pub fn when(&self, col: &str, diags: &mut Vec<Diagnostic>) -> Option<When> {
        let Some(s) = self.text(col) else {
            // A row without a date that sums up the others (`,Total,120` under an activity's
            // rows) is no measurement either.
            if let Some(label) = (0..self.table.width)
                .filter_map(|i| self.table.field(self.row, i))
                .find(|f| is_label(f, &SUMMARY_LABELS))
            {
                self.summary_row(label);
                return None;
            }
            // Pushes the "is empty" warning.
            return self.required_text(col, diags).and(None);
        };
        let when = parse_when(s, self.opts)
            .or_else(|| self.serial_date(s))
            .or_else(|| self.numeric_date(s))
            .or_else(|| self.unix_time(s));
        // A numeric date of a file whose order is known that no order reads: a day the
        // calendar lacks (`31/04/2026`), said as such rather than as a date in the wrong form.
        let impossible = self
            .table
            .numeric_order
            .zip(numeric_parts(s))
            .filter(|(_, p)| {
                !p.4 && NumericOrder::ALL
                    .iter()
                    .all(|o| place(*p, *o, self.opts.program_span).is_none())
            });
        // A numeric date that reads only the other way round from the file's order (see
        // [`numeric_order`]): the order and its date read that way.
        let other_way = self
            .table
            .numeric_order
            .filter(|_| self.table.numeric_against > 0)
            .zip(numeric_parts(s))
            .filter(|(o, p)| place(*p, *o, self.opts.program_span).is_none())
            .and_then(|(o, p)| {
                NumericOrder::ALL
                    .into_iter()
                    .filter(|x| *x != o)
                    .find_map(|x| place(p, x, self.opts.program_span).map(|d| (o, x, d)))
            });
        // A numeric date with a four-digit year in a file whose order is not known, that reads
        // both ways, on two different days: its readings day first and month first.
        let both_ways = numeric_parts(s)
            .filter(|p| {
                !p.4 && self.table.numeric_order.is_none() && self.opts.date_format == "%Y-%m-%d"
            })
            .and_then(|p| {
                let span = self.opts.program_span;
                let day = place(p, NumericOrder::DayFirst, span)?;
                let month = place(p, NumericOrder::MonthFirst, span)?;
                (day != month).then_some((day, month))
            });
        match when.map(|w| self.utc_by_header(s, w)) {
            Some(w) => {
                if w.time.is_some() {
                    self.table.timestamps.set(true);
                }
                // Written out rather than in the program's format or ISO 8601.
                let b = s.as_bytes();
                let month_word = |w: &str| {
                    w.len() >= 3
                        && w.chars().all(|c| c.is_ascii_alphabetic())
                        && !w.eq_ignore_ascii_case("utc")
                };
                if s.split([' ', ',', '-']).any(month_word) {
                    self.table
                        .recognised("dates with the month's name (`May 1, 2026`)");
                } else if b.len() >= 10
                    && b[2] == b'.'
                    && b[5] == b'.'
                    && self.opts.date_format == "%Y-%m-%d"
                {
                    self.table
                        .recognised("dotted dates read day first (`01.05.2026` = 1 May 2026)");
                } else if b.len() == 8 && b.iter().all(u8::is_ascii_digit) {
                    self.table
                        .recognised("dates in ISO 8601's basic format (`20260501`)");
                } else if b.len() >= 10
                    && b[..4].iter().all(u8::is_ascii_digit)
                    && b[4] == b'/'
                    && !self.opts.date_format.contains('/')
                {
                    // Four digits before the first slash: a year (`5/13/2026` has its second
                    // slash at the same place and is month first).
                    self.table
                        .recognised("dates written year/month/day (`2026/05/01`)");
                }
                if w.from_utc {
                    self.table.utc_converted.set(true);
                }
                Some(w)
            }
            // A row that sums up the others (`Average`, `Total` where the date would be) is no
            // measurement: left out, and counted for the file's note.
            None if is_summary_date(s) => {
                self.summary_row(s);
                None
            }
            None if impossible.is_some() => {
                let (order, (a, b, y, ..)) = impossible.expect("checked");
                let (day, month) = match order {
                    NumericOrder::MonthFirst => (b, a),
                    _ => (a, b),
                };
                let why = match NaiveDate::from_ymd_opt(y, month, 1) {
                    Some(first) => {
                        let days = first
                            .checked_add_months(chrono::Months::new(1))
                            .and_then(|next| next.pred_opt())
                            .map_or(31, |last| last.day());
                        format!("day {day} of month {month}, which has {days} days in {y}")
                    }
                    None if month == 0 || day == 0 => "a day or month 0".to_string(),
                    None => format!("month {month}, and a year has 12"),
                };
                let like = self
                    .table
                    .numeric_example
                    .as_ref()
                    .map(|(w, d)| format!(" (`{w}` = {d})"))
                    .unwrap_or_default();
                diags.push(
                    self.warn(col, "no such day; the row is dropped")
                        .expected(format!(
                            "a day of the calendar, written {} as the file's other dates{like}",
                            order.words()
                        ))
                        .found(format!("`{s}`: read {}, {why}", order.words()))
                        .hint("correct the day or the month of this date in the file (a slip of the keyboard or of a month's length), or remove the row"),
                );
                None
            }
            None if other_way.is_some() => {
                let (order, other, date) = other_way.expect("checked");
                let like = self
                    .table
                    .numeric_example
                    .as_ref()
                    .map(|(w, d)| format!(" (`{w}` = {d})"))
                    .unwrap_or_default();
                diags.push(
                    self.warn(
                        col,
                        format!(
                            "a date written {} while the file's other dates are {}; the row is dropped",
                            other.words(),
                            order.words()
                        ),
                    )
                    .expected(format!(
                        "a date written {} as the file's other dates{like}",
                        order.words()
                    ))
                    .found(format!(
                        "`{s}`: no date read {}; read {} it is {date}",
                        order.words(),
                        other.words()
                    ))
                    .hint(format!(
                        "if it is {date}, write it {} as the others or as `{date}`; otherwise (a slip of the keyboard) correct it, or remove the row",
                        order.words()
                    )),
                );
                None
            }
            // A numeric date that reads both ways among dates that do not tell the order
            // (ISO dates, or none that reads one way only): it was an "unreadable date" whose
            // hint said it "reads as a date in the format `%d/%m/%Y`", one of its two readings
            // given as the answer.
            None if both_ways.is_some() => {
                let (day, month) = both_ways.expect("checked");
                diags.push(
                    self.warn(
                        col,
                        format!(
                            "a date that reads both day first ({day}) and month first ({month}), and no date of the file tells which; the row is dropped"
                        ),
                    )
                    .expected("an ISO 8601 date (`2026-04-01`), or a numeric date whose day is after the 12th, which tells the order")
                    .found(format!("`{s}`"))
                    .hint(format!(
                        "write this date as ISO 8601 (`{day}` or `{month}`, whichever it is), or set `input.date_format` in program.yaml if every file of the program writes dates in one order"
                    )),
                );
                None
            }
            None if is_serial(s) => {
                let reading = |system: SerialDates| {
                    serial_number(s)
                        .and_then(|v| system.date_time(v))
                        .map_or("no date".to_string(), |dt| dt.date().to_string())
                };
                diags.push(
                    self.warn(col, format!(
                        "a spreadsheet serial date whose date system cannot be told (`{s}` is {} in the 1900 date system, {} in the 1904 one); the row is dropped",
                        reading(SerialDates::From1900),
                        reading(SerialDates::From1904)
                    ))
                    .expected("a date such as `2026-05-01`")
                    .found(format!("`{s}`"))
                    .hint("in the spreadsheet, format the date column as dates (e.g. yyyy-mm-dd) and save the CSV again"),
                );
                None
            }
            None => {
                let probe = NaiveDate::from_ymd_opt(2026, 4, 1)
                    .expect("valid")
                    .and_hms_opt(7, 30, 0)
                    .expect("valid");
                let example = probe.format(&self.opts.date_format).to_string();
                let other = ["%Y-%m-%d", "%d/%m/%Y", "%m/%d/%Y", "%d.%m.%Y", "%Y/%m/%d"]
                    .into_iter()
                    .find(|f| {
                        let full = |d: &str| {
                            NaiveDate::parse_from_str(d, f).is_ok_and(|x| x.year() >= 1000)
                        };
                        *f != self.opts.date_format
                            && (full(s) || s.split_once(' ').is_some_and(|(d, _)| full(d)))
                    });
                let hint = match other {
                    Some(f) => format!(
                        "the value reads as a date in the format `{f}`; write dates like `{example}` or set `input.date_format` in program.yaml (a time may follow, e.g. `{f} %H:%M`)"
                    ),
                    None => format!(
                        "write dates like `{example}` or as ISO 8601 date-times (`2026-04-01T07:30:00+02:00`), and check the day exists"
                    ),
                };
                // In a file whose numeric dates were read in an order (`14/04/2026`, day first),
                // a date like the others is what the row needs, not the program's `%Y-%m-%d`: a
                // typo (`1O/05/2026`) read "expected: a date like `2026-04-01` (format
                // `%Y-%m-%d`)", as if the file's form were wrong.
                let (expected, hint) = match (self.table.numeric_order, &self.table.numeric_example)
                {
                    (Some(order), Some((w, d))) => (
                        format!(
                            "a date written {} as the file's other dates (`{w}` = {d}), or an ISO 8601 date",
                            order.words()
                        ),
                        format!(
                            "correct this date in the file (digits only, {} like `{w}`), or remove the row",
                            order.words()
                        ),
                    ),
                    _ => (
                        format!(
                            "a date like `{example}` (format `{}`) or an ISO 8601 date-time",
                            self.opts.date_format
                        ),
                        hint,
                    ),
                };
                // A delimiter inside the text before the date moved it one column on.
                let hint = self.split_text_before(col).unwrap_or(hint);
                diags.push(
                    self.warn(col, "unreadable date; the row is dropped")
                        .expected(expected)
                        .found(format!("`{s}`"))
                        .hint(hint),
                );
                None
            }
        }
    }

    /// Counts this row as one that sums up the others (`label`), for the file's note.
    pub fn summary_row(&self, label: &str) {
        self.ctx.uncount_row();
        let mut rows = self.table.summary_rows.borrow_mut();
        rows.0 += 1;
        // The first in the file: rows summed up in one field are counted while reading.
        if rows.1.as_ref().is_none_or(|(l, _)| *l > self.row.line) {
            rows.1 = Some((self.row.line, label.to_string()));
        }
    }

    /// A numeric date (`13/05/2026`) in the order found for the file (see [`NumericOrder`]),
    /// with a time if one follows.
    fn numeric_date(&self, s: &str) -> Option<When> {
        let order = self.table.numeric_order?;
        let parts = numeric_parts(s)?;
        let date = place(parts, order, self.opts.program_span)?;
        if parts.4 {
            self.table.recognised(
                "two-digit years (`05/01/26`) read in the one century that puts the dates within the program",
            );
        }
        let rest = s.split_once([' ', 'T']).map(|(_, t)| t.trim());
        let time = match rest {
            None | Some("") => None,
            Some(t) => Some(
                ["%H:%M", "%H:%M:%S", "%I:%M %p", "%I:%M:%S %p"]
                    .iter()
                    .find_map(|f| NaiveTime::parse_from_str(t, f).ok())?,
            ),
        };
        Some(When {
            date,
            time,
            from_utc: false,
        })
    }

    /// A spreadsheet serial date, in the date system found for the file (see [`SerialDates`]).
    fn serial_date(&self, s: &str) -> Option<When> {
        let (system, _, _) = self.table.serial_dates.as_ref()?;
        let dt = system.date_time(serial_number(s)?)?;
        let midnight = NaiveTime::MIN;
        Some(When {
            date: dt.date(),
            time: (dt.time() != midnight).then_some(dt.time()),
            from_utc: false,
        })
    }

    /// Unix time: whole seconds (10 digits) or milliseconds (13 digits) since 1970-01-01 UTC,
    /// the instant some phone-app and scale exports write for a measurement (from memory).
    /// Taken on its local day in `input.time_zone`, else on its UTC day, like `…Z`; only
    /// within [`SERIAL_DATE_MARGIN_DAYS`] of the program, since ten digits could also be a
    /// date with an hour (`2026050107`), and read so the instant falls years away. Every row
    /// of such an export was dropped as an unreadable date.
    fn unix_time(&self, s: &str) -> Option<When> {
        if !s.bytes().all(|b| b.is_ascii_digit()) {
            return None;
        }
        let (secs, millis) = match s.len() {
            10 => (s.parse::<i64>().ok()?, 0),
            13 => {
                let ms = s.parse::<i64>().ok()?;
                (ms.div_euclid(1000), ms.rem_euclid(1000))
            }
            _ => return None,
        };
        let instant =
            chrono::DateTime::from_timestamp(secs, u32::try_from(millis).ok()? * 1_000_000)?;
        let (start, end) = self.opts.program_span?;
        let margin = chrono::Duration::days(SERIAL_DATE_MARGIN_DAYS);
        let utc_day = instant.date_naive();
        if utc_day < start - margin || utc_day > end + margin {
            return None;
        }
        let local = match &self.opts.time_zone {
            Some(z) => z.local(instant.fixed_offset()),
            None => instant.naive_utc(),
        };
        self.table.recognised(if s.len() == 10 {
            "times in Unix seconds (`1777622400` = 2026-05-01 08:00 UTC)"
        } else {
            "times in Unix milliseconds (`1777622400000` = 2026-05-01 08:00 UTC)"
        });
        Some(When {
            date: local.date(),
            time: Some(local.time()),
            from_utc: true,
        })
    }

    /// A time written without an offset under a header that says UTC (`Date (UTC)`), taken as
    /// UTC like `…Z` (converted to `input.time_zone` when set); it was read as local time, so a
    /// late-evening UTC weigh-in counted on the day before its local one, without a word.
    fn utc_by_header(&self, s: &str, w: When) -> When {
        let Some(time) = w.time else { return w };
        // An offset or `Z` after the hours (`23:30+08:00`, `23:30Z`) was read already.
        let after_time = s.find(':').map_or("", |i| &s[i..]);
        if !self.table.dates_in_utc || w.from_utc || after_time.contains(['+', '-', 'Z', 'z']) {
            return w;
        }
        let naive = w.date.and_time(time);
        let local = match &self.opts.time_zone {
            Some(z) => z.local(naive.and_utc().fixed_offset()),
            None => naive,
        };
        When {
            date: local.date(),
            time: Some(local.time()),
            from_utc: true,
        }
    }

    /// The instant `col`'s date-time names when it names one whatever the time zone: written
    /// with its offset or as UTC (`Z`, `UTC`), Unix time, or a time under a header that says
    /// UTC (`Date (UTC)`). `None` for a local time written without an offset.
    pub fn instant(&self, col: &str) -> Option<DateTime<FixedOffset>> {
        let s = self.text(col)?.trim();
        if let Some(t) = written_instant(s, self.opts) {
            return Some(t);
        }
        if self.unix_time(s).is_some() {
            let (secs, millis) = match s.len() {
                13 => (
                    s.parse::<i64>().ok()?.div_euclid(1000),
                    s.parse::<i64>().ok()?.rem_euclid(1000),
                ),
                _ => (s.parse::<i64>().ok()?, 0),
            };
            return DateTime::from_timestamp(secs, u32::try_from(millis).ok()? * 1_000_000)
                .map(|t| t.fixed_offset());
        }
        if self.table.dates_in_utc {
            let w = parse_when(s, self.opts)?;
            return Some(w.date.and_time(w.time?).and_utc().fixed_offset());
        }
        None
    }

    /// A required number, with a message naming a decimal comma when there is one.
    pub fn number(&self, col: &str, diags: &mut Vec<Diagnostic>) -> Option<f64> {
        let s = self.required_text(col, diags)?;
        self.parse_number(col, &s, "the row is dropped", diags)
    }

    /// An optional number: empty gives `Ok(None)`; a bad value is warned about and gives
    /// `Err(Dropped)`.
    pub fn optional_number(
        &self,
        col: &str,
        consequence: &str,
        diags: &mut Vec<Diagnostic>,
    ) -> Result<Option<f64>, Dropped> {
        match self.text(col) {
            None => Ok(None),
            Some(s) => self
                .parse_number(col, s, consequence, diags)
                .map(Some)
                .ok_or(Dropped),
        }
    }

    /// The likely cause of `col` not reading, when it is text right after a text field: a
    /// delimiter inside the text before it, which split it across two columns and moved every
    /// later value one column on, so the row has the header's width and nothing else tells of
    /// it. The evidence is either a space after the delimiter (`2026-03-02,walk, brisk,30,`
    /// under `date,activity,minutes,met,notes`, `brisk` in `minutes`: how people write a comma
    /// in text; `kg,clinic` is two values), or the row shifted back by one: every later value
    /// fits the column before its own ([`fits_column`]) and one of them, as written, does not
    /// fit its own (`2026-04-14` in `attended` of `Walk,talk,2026-04-14,yes` under
    /// `session,date,attended,notes`; `Cycling,abc,6,` under
    /// `date,activity,minutes,met,notes` has one value that does not read, and no hint). Said
    /// as how to write that value. Numbers, dates, times and units that do not read ask it.
    pub fn split_text_before(&self, col: &str) -> Option<String> {
        let i = *self.table.columns.get(col)?;
        let prev_i = i.checked_sub(1)?;
        let raw = self.table.raw_field(self.row, i)?;
        let text = |t: &str| is_text_value(t, self.opts);
        if !text(raw.trim()) {
            return None;
        }
        let prev = self.table.field(self.row, prev_i)?;
        if !text(prev) {
            return None;
        }
        let ours = |j: usize| {
            self.table
                .columns
                .iter()
                .find(|&(_, &k)| k == j)
                .map(|(&c, _)| c)
        };
        // Shifted back by one, every later value fits the column before its own; as written,
        // one of them does not fit its own read column either: two failures one delimiter
        // explains (a single value that does not read is more likely just wrong).
        let shifted = || {
            let later = i + 1..self.table.width;
            later.clone().all(|j| {
                fits_column(
                    ours(j - 1),
                    self.table.field(self.row, j).unwrap_or(""),
                    self.opts,
                )
            }) && later.into_iter().any(|j| {
                ours(j).is_some()
                    && !fits_column(
                        ours(j),
                        self.table.field(self.row, j).unwrap_or(""),
                        self.opts,
                    )
            })
        };
        if !raw.starts_with(' ') && !shifted() {
            return None;
        }
        let d = char::from(self.table.delimiter);
        let joined = format!("{prev}{d}{}", raw.trim_end());
        let value = self
            .table
            .written
            .get(prev_i)
            .filter(|h| !h.trim().is_empty())
            .map_or_else(
                || format!("value in field {i}"),
                |h| format!("`{}` value", h.trim()),
            );
        Some(format!(
            "the `{d}` in the {value} `{joined}` is likely read as a delimiter, moving `{}` and every value after it one column on: quote the value: `\"{joined}\"` (or write it without the `{d}`)",
            raw.trim()
        ))
    }

    /// Reads `s` as the number of `col`, warning (with `consequence`) when it is not one.
    pub fn parse_number(
        &self,
        col: &str,
        s: &str,
        consequence: &str,
        diags: &mut Vec<Diagnostic>,
    ) -> Option<f64> {
        // Thousands separators, as formatted cells are exported (`1.850` kcal from a
        // German-locale spreadsheet was read as 1.85 kcal, without a word).
        if let Some(v) = parse_grouped(s, INTEGER_VALUED.contains(&col)) {
            self.table
                .thousands
                .borrow_mut()
                .get_or_insert_with(|| (s.trim().to_string(), v));
            return Some(v);
        }
        match parse_decimal(s) {
            Ok(v) => Some(v),
            // Where the comma does not separate fields, it is the decimal separator of the
            // locale the file was written in (`70,6`). Where it does, a cell quoted to hold one
            // (`"70,6"`: spreadsheets of such locales export comma-separated files so) is read
            // the same when the comma cannot group thousands: groups are three digits, so a
            // comma followed by any other number of digits is a decimal comma. `"72,500"` could
            // be either and keeps its warning.
            Err(NumberError::DecimalComma)
                if self.table.delimiter != b','
                    || s.trim().rsplit_once(',').is_some_and(|(_, b)| b.len() != 3) =>
            {
                let v = parse_decimal(&s.replacen(',', ".", 1)).ok()?;
                self.table.decimal_comma.set(true);
                Some(v)
            }
            Err(e) => {
                let what = match e {
                    NumberError::DecimalComma => "decimal comma",
                    NumberError::Exponent => "exponent notation",
                    NumberError::OutOfRange => "out-of-range number (not finite)",
                    NumberError::NotFinite => "not a finite number",
                    NumberError::Empty | NumberError::NotANumber => "not a number",
                };
                // The example fits the column: a kcal cell read "e.g. `72.5`" and "after the
                // number: `72.5 kg`", a weight, beside a diary's `n/a`.
                let (example, unit) = match col {
                    "kcal" => ("1850", "kcal"),
                    "minutes" => ("45", "min"),
                    "steps" => ("8000", ""),
                    "met" => ("3.5", ""),
                    "carbs_g" | "fat_g" | "protein_g" | "free_sugars_g" => ("45", "g"),
                    "value" => ("5.7", "%"),
                    _ => ("72.5", "kg"),
                };
                let split = matches!(e, NumberError::NotANumber)
                    .then(|| self.split_text_before(col))
                    .flatten();
                let hint = split.unwrap_or_else(|| match e {
                    NumberError::NotANumber if unit.is_empty() => {
                        format!("write a number such as `{example}` (no words)")
                    }
                    NumberError::NotANumber => format!(
                        "write a number such as `{example}` (no words; where a unit is allowed, after the number: `{example} {unit}`)"
                    ),
                    _ => e.hint().to_string(),
                });
                diags.push(
                    self.warn(col, format!("{what} in `{col}`; {consequence}"))
                        .expected(format!("a number with a decimal point, e.g. `{example}`"))
                        .found(format!("`{s}`"))
                        .hint(hint),
                );
                None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const SPEC: FileSpec = FileSpec {
        name: "weights.csv",
        required: &["date", "weight", "unit"],
        optional: &["time", "source"],
        aliases: &[],
        header_units: &[],
    };

    fn read(text: &str, opts: &CsvOptions) -> (Option<Table>, Vec<Diagnostic>) {
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let t = read_table(text, &SPEC, opts, &ctx, &mut d);
        (t, d)
    }

    /// `text` is refused because its first line, read as the header, lacks the columns.
    fn refused_for_missing_columns(text: &str) {
        let (t, d) = read(text, &CsvOptions::default());
        assert!(t.is_none(), "{text}");
        assert!(
            d[0].message.contains("missing required columns"),
            "{}",
            d[0]
        );
    }

    #[test]
    fn columns_in_any_order_with_bom_and_crlf() {
        let (t, d) = read(
            "\u{feff}unit,Weight,date\r\nkg,72.5,2026-04-01\r\n",
            &CsvOptions::default(),
        );
        assert!(d.is_empty(), "{d:?}");
        let t = t.unwrap();
        assert_eq!(t.rows.len(), 1);
        assert_eq!(t.get(&t.rows[0], "weight"), Some("72.5"));
        assert_eq!(t.column("date"), Some(3));
        assert_eq!(t.rows[0].line, 2);
    }

    #[test]
    fn crlf_line_numbers_count_every_line() {
        let (t, d) = read(
            "date,weight,unit\r\n2026-04-01,72,kg\r\n\r\n2026-04-02,72\r\n2026-04-03,71,kg\r\n",
            &CsvOptions::default(),
        );
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].line, Some(4));
        assert_eq!(
            t.unwrap().rows.iter().map(|r| r.line).collect::<Vec<_>>(),
            vec![2, 5]
        );
    }

    #[test]
    fn dates_with_day_and_month_swapped_refuse_the_file() {
        let dmy = CsvOptions {
            date_format: "%d/%m/%Y".into(),
            ..CsvOptions::default()
        };
        // Written month first: 03/04 (4 March) would be read as 3 April, 03/14 gives it away.
        let us = "date,weight,unit\n03/02/2026,80,kg\n03/04/2026,79.8,kg\n03/14/2026,79.5,kg\n";
        let (t, d) = read(us, &dmy);
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(4), Some(1)));
        assert!(d[0].message.contains("`%m/%d/%Y`"), "{}", d[0]);
        assert!(d[0].message.contains("line 2's `03/02/2026`"), "{}", d[0]);
        // The same dates written day first are read, and one date that fits only the program's
        // order settles it (a later date that fits only the other order is a typo, dropped).
        let eu = "date,weight,unit\n02/03/2026,80,kg\n04/03/2026,79.8,kg\n14/03/2026,79.5,kg\n03/14/2026,79.5,kg\n";
        let (t, d) = read(eu, &dmy);
        assert_eq!(t.unwrap().rows.len(), 4);
        assert!(d.is_empty(), "{d:?}");
        // Only dates that read the same either way (4 April, ISO): nothing to refuse.
        let same = "date,weight,unit\n04/04/2026,80,kg\n2026-04-05,79.8,kg\n";
        let (t, d) = read(same, &dmy);
        assert_eq!(t.unwrap().rows.len(), 2);
        assert!(d.is_empty(), "{d:?}");
    }

    #[test]
    fn dates_written_out_by_apps_and_spreadsheets_are_read() {
        let opts = CsvOptions::default();
        let day = |s: &str, o: &CsvOptions| {
            parse_when(s, o).map(|w| (w.date.to_string(), w.time.map(|t| t.to_string())))
        };
        let may1 = Some(("2026-05-01".to_string(), None));
        for s in [
            "May 1, 2026",
            "1 May 2026",
            "1-May-2026",
            "May 01 2026",
            "01 May 2026",
            "2026/05/01",
            "01.05.2026",
        ] {
            assert_eq!(day(s, &opts), may1, "{s}");
        }
        let at = |d: &str, t: &str| Some((d.to_string(), Some(t.to_string())));
        assert_eq!(
            day("September 3, 2026", &opts),
            Some(("2026-09-03".into(), None))
        );
        assert_eq!(
            day("Sep 3, 2026 7:12 PM", &opts),
            at("2026-09-03", "19:12:00")
        );
        assert_eq!(
            day("3 Sep 2026, 07:12", &opts),
            at("2026-09-03", "07:12:00")
        );
        assert_eq!(
            day("2026/05/01 07:12:30", &opts),
            at("2026-05-01", "07:12:30")
        );
        assert_eq!(day("13.05.2026 07:12", &opts), at("2026-05-13", "07:12:00"));
        // A space before the offset (phone health apps): the device's local day.
        assert_eq!(
            day("2026-05-02 07:05:00 +0200", &opts),
            at("2026-05-02", "07:05:00")
        );
        // With the weekday (1 May 2026 is a Friday).
        assert_eq!(day("Fri, May 1, 2026", &opts), may1);
        assert_eq!(day("Friday, 1 May 2026", &opts), may1);
        // Day first without a comma, as diaries write it: every such row was dropped.
        assert_eq!(day("Fri 1 May 2026", &opts), may1);
        assert_eq!(day("Friday 1 May 2026", &opts), may1);
        // Not dates: a summary row, a month-first dotted date, a day that does not exist, a
        // weekday that is not the date's.
        for s in [
            "Average",
            "05.13.2026",
            "Feb 30, 2026",
            "2026/13/01",
            "Thu, May 1, 2026",
            "Sat 1 May 2026",
        ] {
            assert_eq!(day(s, &opts), None, "{s}");
        }
        // A program with its own day-and-month format reads dotted dates only by it.
        let dmy = CsvOptions {
            date_format: "%d/%m/%Y".into(),
            ..CsvOptions::default()
        };
        assert_eq!(day("01.05.2026", &dmy), None);
        assert_eq!(day("May 1, 2026", &dmy), may1);
    }

    #[test]
    fn dotted_dates_written_month_first_refuse_the_file() {
        let (t, d) = read(
            "date,weight,unit\n05.01.2026,72,kg\n05.13.2026 07:10,71.8,kg\n",
            &CsvOptions::default(),
        );
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(3), Some(1)));
        assert!(d[0].message.contains("month first"), "{}", d[0]);
        // Day first, they are read.
        let (t, d) = read(
            "date,weight,unit\n01.05.2026,72,kg\n13.05.2026,71.8,kg\n",
            &CsvOptions::default(),
        );
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.unwrap().rows.len(), 2);
    }

    #[test]
    fn a_header_repeated_inside_the_file_is_not_a_row() {
        // Two exports joined into one file: the second header was dropped as a row with an
        // unreadable date (and, in a file of weights, warned about).
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let text = "Date,Weight,Unit\n2026-05-01,72.5,kg\nDate,Weight,Unit\n2026-05-02,72.3,kg\n";
        let t = read_table(text, &SPEC, &CsvOptions::default(), &ctx, &mut d).unwrap();
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.rows.iter().map(|r| r.line).collect::<Vec<_>>(), [2, 4]);
        assert!(
            ctx.take_notes()[0]
                .message
                .contains("repeated inside the file (first on line 3"),
        );
    }

    /// A home scale app's export with the clinic's export pasted below it (one weights.csv
    /// per participant): each clinic row was dropped as "row has 6 fields but the header has
    /// 4" with a hint to quote text, the clinic's header line among them, and the run ended
    /// with warnings only. The line is named as the header it is, and the file is refused
    /// there, as for a header in another order.
    #[test]
    fn the_header_of_another_export_below_the_rows_refuses_the_file_there() {
        let weights = crate::program::files::WEIGHTS;
        let read_weights = |text: &str| {
            let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
            let mut d = Vec::new();
            let t = read_table(text, &weights, &CsvOptions::default(), &ctx, &mut d);
            (t, d)
        };
        // The same delimiter, other columns.
        let text = "Date,Time,Weight (kg),Notes\n2026-09-07,07:10,81.5,\n2026-09-09,07:02,81.2,\n\
                    Visit Date,Patient Ref,Clinician,Weight (lb),Height (in),Comments\n\
                    2026-09-07,TF-11,Nurse A,161.6,64,\n";
        let (t, d) = read_weights(text);
        assert!(t.is_none(), "the file is not used");
        assert_eq!(d.len(), 1, "{d:#?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(4), Some(1)));
        assert_eq!(
            d[0].message,
            "line 4 is the header of another export, not a row (`Weight (lb)` is a column \
             name); the rows below it cannot be read under the first header's columns, and the \
             file is not used"
        );
        assert_eq!(
            d[0].expected.as_deref(),
            Some("rows under the header on line 1: `Date,Time,Weight (kg),Notes`")
        );
        assert_eq!(
            d[0].found.as_deref(),
            Some("`Visit Date,Patient Ref,Clinician,Weight (lb),Height (in),Comments`")
        );
        assert!(
            d[0].hint.as_deref().is_some_and(|h| h
                .starts_with("a participant has one weights.csv, with every weigh-in under one header: give the rows below line 4")
                && h.contains("write each weight with its unit (`161.6 lb`) under a header that names none (`Weight`)")
                && h.contains("`source` column")),
            "{:?}",
            d[0].hint
        );
        // A semicolon export (decimal commas, CRLF) with a comma export pasted below: the
        // clinic's lines are one field each; shown as written.
        let text = "Date;Weight (kg)\r\n07/09/2026;81,5\r\n09/09/2026;81,2\r\n\
                    Visit Date,Weight (lb)\r\n2026-09-21,178.0\r\n";
        let (t, d) = read_weights(text);
        assert!(t.is_none());
        assert_eq!((d[0].line, d[0].column), (Some(4), Some(1)), "{d:#?}");
        assert_eq!(d[0].found.as_deref(), Some("`Visit Date,Weight (lb)`"));
        // Rows of text that name no column of ours, or hold a date or a number, are rows.
        let text =
            "Date,Weight (kg),Notes\n2026-09-07,81.5,fine\nAverage,81.4,\nnot weighed,away,\n";
        let (t, d) = read_weights(text);
        assert!(t.is_some(), "{d:#?}");
        assert!(
            d.iter().all(|x| x.severity != crate::diag::Severity::Error),
            "{d:#?}"
        );
    }

    /// A row of one field (another delimiter) said "row has 1 fields".
    #[test]
    fn a_row_of_one_field_says_field() {
        let (t, d) = read(
            "date,weight,unit\n2026-05-01,72.5,kg\n2026-05-02;72.3;kg\n",
            &CsvOptions::default(),
        );
        assert_eq!(t.unwrap().rows.len(), 1);
        assert_eq!(
            d[0].message,
            "row has 1 field but the header has 3; the row is dropped"
        );
        assert_eq!(d[0].found.as_deref(), Some("1 field: `2026-05-02;72.3;kg`"));
        // At the first field the row lacks (it had a line only).
        assert_eq!(d[0].column, Some(2));
    }

    /// A clinic export's `Height (in)` beside `Weight (lb)` is one letter from `weight`, and
    /// was warned about as our column misspelt ("check its spelling"), so every run on such an
    /// export ended with warnings (exit code 1). The file reads `weight` already: it is a
    /// column not read, in the note. A slip of a column the file lacks, or one holding ours as
    /// a word, is still warned about.
    #[test]
    fn a_column_a_letter_from_one_the_file_reads_already_is_not_warned_about() {
        let weights = crate::program::files::WEIGHTS;
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let text =
            "Visit Date,Clinician,Weight (lb),Height (in),Comments\n2026-09-07,Nurse A,181.0,64,\n";
        let t = read_table(text, &weights, &CsvOptions::default(), &ctx, &mut d);
        assert!(d.is_empty(), "{d:#?}");
        assert_eq!(t.unwrap().rows.len(), 1);
        let notes: Vec<String> = ctx.take_notes().into_iter().map(|n| n.message).collect();
        assert!(
            notes
                .iter()
                .any(|n| n
                    .starts_with("columns `Clinician`, `Height (in)`, `Comments` are not read")),
            "{notes:#?}"
        );
        // `Weight 2` holds `weight` as a word: still warned about beside `Weight`.
        let mut d = Vec::new();
        let text = "Date,Weight,Weight 2,Unit\n2026-09-07,81.5,81.6,kg\n";
        read_table(text, &weights, &CsvOptions::default(), &ctx, &mut d);
        assert_eq!(d.len(), 1, "{d:#?}");
        assert_eq!(d[0].message, "extra column `Weight 2` is ignored");
        // `Test description` beside the column read as `test` (a lab export's LOINC code,
        // mapped) only describes it: named in the note, as `Weight 2` is not.
        let labs = crate::program::files::LABS;
        let mut map = BTreeMap::new();
        map.insert(
            "labs".to_string(),
            ColumnMap::from([("loinc".to_string(), "test".to_string())]),
        );
        let opts = CsvOptions {
            columns: Arc::new(map),
            ..CsvOptions::default()
        };
        let mut d = Vec::new();
        let text =
            "Date;LOINC;Test description;Result;Units\n2026-09-07;4548-4;HbA1c;41;mmol/mol\n";
        let t = read_table(text, &labs, &opts, &ctx, &mut d);
        assert!(d.is_empty(), "{d:#?}");
        assert_eq!(t.unwrap().rows.len(), 1);
        let notes: Vec<String> = ctx.take_notes().into_iter().map(|n| n.message).collect();
        assert!(
            notes
                .iter()
                .any(|n| n.starts_with("columns `Test description` are not read")
                    || n.starts_with("column `Test description` is not read")),
            "{notes:#?}"
        );
        // `sorce` is a slip of `source`, which the file does not read: still warned about.
        let mut d = Vec::new();
        let text = "Date,Weight,Unit,sorce\n2026-09-07,81.5,kg,home\n";
        read_table(text, &weights, &CsvOptions::default(), &ctx, &mut d);
        assert_eq!(d.len(), 1, "{d:#?}");
        assert_eq!(d[0].message, "extra column `sorce` is ignored");
    }

    /// Exports of two app versions joined, the second with its columns in another order: the
    /// rows below it were read under the first header's columns (an intake file's `kcal` took
    /// `protein_g`, 90 kcal a day), with only an "unreadable date" warning for the header line.
    #[test]
    fn a_header_repeated_with_its_columns_in_another_order_refuses_the_file_there() {
        let text = "date,weight,unit,source\n2026-05-01,72.5,kg,home\n\
                    date,unit,source,weight\n2026-05-02,kg,home,72.3\n";
        let (t, d) = read(text, &CsvOptions::default());
        assert!(t.is_none(), "the file is not used");
        assert_eq!(d.len(), 1, "{d:#?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(3), Some(1)));
        assert_eq!(
            d[0].message,
            "the header is repeated on line 3 with other columns or in another order; the rows \
             below it cannot be read under the first header's columns, and the file is not used"
        );
        assert_eq!(
            d[0].expected.as_deref(),
            Some("the header as on line 1: `date,weight,unit,source`")
        );
        assert_eq!(d[0].found.as_deref(), Some("`date,unit,source,weight`"));
        // Some of its columns only: `date,kcal,protein_g` then `date,protein_g` read the
        // protein as kcal.
        let fewer = "date,weight,unit,source\n2026-05-01,72.5,kg,home\n\
                     date,unit,weight\n2026-05-02,kg,72.3\n";
        let (t, d) = read(fewer, &CsvOptions::default());
        assert!(t.is_none());
        assert_eq!(d[0].found.as_deref(), Some("`date,unit,weight`"), "{d:#?}");
        // In the same order it is the header again, not a problem.
        let same = "date,weight,unit\n2026-05-01,72.5,kg\ndate,weight,unit\n2026-05-02,72.3,kg\n";
        let (t, d) = read(same, &CsvOptions::default());
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.unwrap().rows.len(), 2);
    }

    #[test]
    fn a_few_dates_that_cannot_be_told_among_others_cost_their_rows_only() {
        let opts = CsvOptions {
            program_span: NaiveDate::from_ymd_opt(2026, 4, 1)
                .zip(NaiveDate::from_ymd_opt(2026, 9, 30)),
            ..CsvOptions::default()
        };
        // One ambiguous numeric date, one unplaceable serial date and one month-first dotted
        // date among ISO dates: each row is warned about; the file is read.
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let text =
            "date,weight,unit\n2026-05-01,72,kg\n05/04/2026,72,kg\n40000,72,kg\n05.13.2026,72,kg\n";
        let t = read_table(text, &SPEC, &opts, &ctx, &mut d).unwrap();
        assert!(d.is_empty(), "{d:?}");
        let read: Vec<Option<String>> = t
            .rows
            .iter()
            .map(|row| {
                let c = Cells {
                    table: &t,
                    row,
                    ctx: &ctx,
                    opts: &opts,
                };
                c.date("date", &mut d).map(|x| x.to_string())
            })
            .collect();
        assert_eq!(read, [Some("2026-05-01".to_string()), None, None, None]);
        assert_eq!(
            d.iter().map(|x| x.line).collect::<Vec<_>>(),
            [Some(3), Some(4), Some(5)]
        );
        assert!(
            d[1].message
                .contains("`40000` is 2009-07-06 in the 1900 date system"),
            "{}",
            d[1]
        );
        // `05/04/2026` is named with both its readings, none given as the answer (its hint
        // said it "reads as a date in the format `%d/%m/%Y`").
        assert!(
            d[0].message.contains(
                "reads both day first (2026-04-05) and month first (2026-05-04), and no date of the file tells which"
            ),
            "{}",
            d[0]
        );
        assert_eq!(d[0].found.as_deref(), Some("`05/04/2026`"));
        assert!(
            !d[0].hint.as_deref().unwrap().contains("%d/%m/%Y"),
            "{}",
            d[0]
        );
        assert!(
            d.iter()
                .all(|x| x.severity == crate::diag::Severity::Warning)
        );
    }

    #[test]
    fn a_title_line_above_the_header_is_not_read_as_the_header() {
        // Trackers start some exports with the section's name; the file was refused for
        // missing columns.
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let text = "Body\nDate,Weight,Unit\n\"2026-05-01\",\"72.5\",kg\n2026-05-02,72.3,kg\n";
        let t = read_table(text, &SPEC, &CsvOptions::default(), &ctx, &mut d).unwrap();
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.header_line, 2);
        assert_eq!(t.rows.iter().map(|r| r.line).collect::<Vec<_>>(), [3, 4]);
        assert_eq!(t.get(&t.rows[0], "weight"), Some("72.5"));
        assert_eq!(
            ctx.take_notes()[0].message,
            "the first line, `Body`, is a title above the header (line 2) and is not read"
        );
        // A health app's metadata line (its table's name, a version, a count) above the
        // header: fewer fields than the header, none of them a column. The file was refused
        // for missing columns.
        let text =
            "com.example.health.weight,6310002,4\nDate,Weight,Unit,Source\n2026-05-01,72.5,kg,\n";
        let t = read_table(text, &SPEC, &CsvOptions::default(), &ctx, &mut d).unwrap();
        assert!(d.is_empty(), "{d:?}");
        assert_eq!((t.header_line, t.rows[0].line), (2, 3));
        assert_eq!(t.get(&t.rows[0], "weight"), Some("72.5"));
        assert!(
            ctx.take_notes()[0]
                .message
                .starts_with("the first line, `com.example.health.weight,63"),
        );
        // A first line that names a column, or has as many fields as the next, is the header.
        // (As before, such a header lacks the file's columns, and the file is refused.)
        for text in [
            "a,b,c\nDate,Weight,Unit\n2026-05-01,72.5,kg\n",
            "Date,x\nDate,Weight,Unit\n2026-05-01,72.5,kg\n",
        ] {
            refused_for_missing_columns(text);
        }
        // A one-column first line above data is no title: the header is missing, as before.
        refused_for_missing_columns("weight\n2026-05-01,72.5,kg\n");
    }

    #[test]
    fn several_lines_above_the_header_are_not_read_and_the_delimiter_is_found_below_them() {
        // An export's title, date and a blank line above a semicolon header: the title hid
        // the delimiter (sniffed on the first line, it found none and read commas), and only
        // one line above the header was allowed; both files were refused for missing columns.
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let text = "Weight export for P1\nExported 2026-10-01 08:00\n\nDate;Weight;Unit;Note\n\
                    01.05.2026;72,5;kg;\n02.05.2026;72,3;kg;after run\n";
        let t = read_table(text, &SPEC, &CsvOptions::default(), &ctx, &mut d)
            .unwrap_or_else(|| panic!("{d:?}"));
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.delimiter, b';');
        assert_eq!(t.header_line, 4);
        assert_eq!(t.rows.iter().map(|r| r.line).collect::<Vec<_>>(), [5, 6]);
        assert_eq!(t.get(&t.rows[1], "weight"), Some("72,3"));
        assert!(
            ctx.take_notes().iter().any(|n| n.message
                == "the 2 lines above the header (line 4), the first `Weight export for P1`, are not read"),
        );
        // One title line above a tab-separated header, as above.
        let text = "Body\nDate\tWeight\tUnit\n2026-05-01\t72.5\tkg\n";
        let t = read_table(text, &SPEC, &CsvOptions::default(), &ctx, &mut d).unwrap();
        assert!(d.is_empty(), "{d:?}");
        assert_eq!((t.delimiter, t.header_line, t.rows[0].line), (b'\t', 2, 3));
        // Ten lines above the header are read so; eleven are not (the first line is then the
        // header, which lacks the columns).
        let lines = |k: usize| (1..=k).map(|i| format!("note {i}\n")).collect::<String>();
        let ten = format!(
            "{}Date,Weight,Unit\n2026-05-01,72.5,kg\n",
            lines(MAX_PREAMBLE_LINES)
        );
        let t = read_table(&ten, &SPEC, &CsvOptions::default(), &ctx, &mut d).unwrap();
        assert_eq!((t.header_line, t.rows.len()), (11, 1));
        let eleven = format!("{}Date,Weight,Unit\n2026-05-01,72.5,kg\n", lines(11));
        refused_for_missing_columns(&eleven);
        // A line above that names a column, or holds a quote, ends the search: the first line
        // is the header, as before.
        for text in [
            "Summary\nWeight,Unit\nDate,Weight,Unit\n2026-05-01,72.5,kg\n",
            "Report for \"P1\"\nDate,Weight,Unit\n2026-05-01,72.5,kg\n",
        ] {
            refused_for_missing_columns(text);
        }
    }

    #[test]
    fn serial_dates_in_both_date_systems() {
        // ECMA-376 Part 1, "Date Representation": DATEVALUE("01-Feb-2006") is 38749 in the
        // 1900 date base system and 37287 in the 1904 one; "03-Feb-1910" 3687 and 2225;
        // "01-Jan-1904" is 0 in the 1904 system; 31 December 9999 is 2958465 and 2957003;
        // serial 61 is 1 March 1900 (60 stands for the 29 February 1900 that never was).
        let day = |s: SerialDates, v: f64| s.date_time(v).map(|dt| dt.date().to_string());
        use SerialDates::*;
        assert_eq!(day(From1900, 38749.0).as_deref(), Some("2006-02-01"));
        assert_eq!(day(From1904, 37287.0).as_deref(), Some("2006-02-01"));
        assert_eq!(day(From1900, 3687.0).as_deref(), Some("1910-02-03"));
        assert_eq!(day(From1904, 2225.0).as_deref(), Some("1910-02-03"));
        assert_eq!(day(From1904, 0.0).as_deref(), Some("1904-01-01"));
        assert_eq!(day(From1900, 61.0).as_deref(), Some("1900-03-01"));
        assert_eq!(day(From1900, 2_958_465.0).as_deref(), Some("9999-12-31"));
        assert_eq!(day(From1904, 2_957_003.0).as_deref(), Some("9999-12-31"));
        assert_eq!(day(From1900, 2_958_466.0), None);
        assert_eq!(day(From1900, 60.0), None);
        // A fraction of a day is the time: 0.3 × 24 h = 07:12.
        assert_eq!(
            From1900.date_time(46145.3).unwrap().to_string(),
            "2026-05-03 07:12:00"
        );
    }

    #[test]
    fn serial_dates_are_read_in_the_one_system_that_fits_the_program() {
        let opts = CsvOptions {
            program_span: NaiveDate::from_ymd_opt(2026, 4, 1)
                .zip(NaiveDate::from_ymd_opt(2026, 9, 30)),
            ..CsvOptions::default()
        };
        let dates = |text: &str, opts: &CsvOptions| {
            let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
            let mut d = Vec::new();
            let t = read_table(text, &SPEC, opts, &ctx, &mut d);
            let got = t.map(|t| {
                let mut d2 = Vec::new();
                let w: Vec<String> = t
                    .rows
                    .iter()
                    .map(|row| {
                        let c = Cells {
                            table: &t,
                            row,
                            ctx: &ctx,
                            opts,
                        };
                        let w = c.when("date", &mut d2).unwrap();
                        format!("{} {:?}", w.date, w.time.map(|t| t.to_string()))
                    })
                    .collect();
                t.describe(opts, &ctx);
                w
            });
            (got, d, ctx.take_notes())
        };
        // 46143 is 1 May 2026 in the 1900 system (2 May 2030 in the 1904 one).
        let (got, d, notes) = dates(
            "date,weight,unit\n46143,72.5,kg\n46145.3,72.1,kg\n2026-05-04,72,kg\n",
            &opts,
        );
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(
            got.unwrap(),
            [
                "2026-05-01 None",
                "2026-05-03 Some(\"07:12:00\")",
                "2026-05-04 None"
            ]
        );
        assert!(notes[0].message.contains("1900 date system"), "{notes:?}");
        // 44681 is 1 May 2026 in the 1904 system (30 April 2022 in the 1900 one).
        let (got, d, _) = dates("date,weight,unit\n44681,72.5,kg\n44682,72.3,kg\n", &opts);
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(got.unwrap(), ["2026-05-01 None", "2026-05-02 None"]);
        // Neither system places 40000 (2009 or 2013) near the program: refused at that cell.
        let (got, d, _) = dates("date,weight,unit\n40000,72.5,kg\n40001,72,kg\n", &opts);
        assert!(got.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(1)));
        assert!(
            d[0].message.contains(
                "`40000` is 2009-07-06 in the 1900 date system, 2013-07-07 in the 1904 one"
            ),
            "{}",
            d[0]
        );
        assert!(d[0].message.contains("neither system"), "{}", d[0]);
        // A program of six years holds both readings of 46143: refused.
        let long = CsvOptions {
            program_span: NaiveDate::from_ymd_opt(2025, 1, 1)
                .zip(NaiveDate::from_ymd_opt(2030, 12, 31)),
            ..CsvOptions::default()
        };
        let (got, d, _) = dates("date,weight,unit\n46143,72.5,kg\n", &long);
        assert!(got.is_none());
        assert!(d[0].message.contains("both systems"), "{}", d[0]);
        // A spreadsheet of a decimal-comma locale writes an unformatted date-time cell with a
        // decimal comma (`46145,3`), in a semicolon file or quoted in a comma one: every row
        // was dropped as an "unreadable date", and the file refused.
        let (got, d, notes) = dates(
            "date;weight;unit\n46143,25;72,5;kg\n46145,3;72,1;kg\n",
            &opts,
        );
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(
            got.unwrap(),
            [
                "2026-05-01 Some(\"06:00:00\")",
                "2026-05-03 Some(\"07:12:00\")"
            ]
        );
        assert!(
            notes[0].message.contains("(`46143,25` = 2026-05-01)"),
            "{notes:?}"
        );
        let (got, d, _) = dates("date,weight,unit\n\"46143,25\",72.5,kg\n", &opts);
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(got.unwrap(), ["2026-05-01 Some(\"06:00:00\")"]);
    }

    #[test]
    fn rows_that_leave_off_trailing_empty_values_or_end_with_a_delimiter_are_read() {
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        // The header has a `source` column, rows without a source leave it off (lines 2, 4);
        // line 3 ends with a delimiter; line 5 leaves off the required `unit` and is dropped;
        // line 6 has a value after the last column and is dropped.
        let text = "date,weight,unit,source\n2026-04-01,72,kg\n2026-04-02,71.8,kg,clinic,\n2026-04-03,71.5,kg\n2026-04-04,71\n2026-04-05,71,kg,home,x\n";
        let t = read_table(text, &SPEC, &CsvOptions::default(), &ctx, &mut d).unwrap();
        assert_eq!(
            t.rows.iter().map(|r| r.line).collect::<Vec<_>>(),
            vec![2, 3, 4]
        );
        assert_eq!(t.get(&t.rows[0], "source"), None);
        assert_eq!(t.get(&t.rows[1], "source"), Some("clinic"));
        assert_eq!(t.get(&t.rows[2], "unit"), Some("kg"));
        assert_eq!(
            d.iter().map(|x| x.line).collect::<Vec<_>>(),
            vec![Some(5), Some(6)],
            "{d:?}"
        );
        let notes: Vec<String> = ctx.take_notes().into_iter().map(|n| n.message).collect();
        assert_eq!(
            notes,
            [
                "2 rows with fewer fields than the header (values left off at the end) read with the missing values empty",
                "1 row with empty fields after the last column (a delimiter at the end of the row) read without them"
            ]
        );
    }

    #[test]
    fn lone_cr_line_ends_count_lines_and_the_delimiter_is_recognised() {
        // The classic Mac line end (`\r` alone), still written by some spreadsheet exports, in a
        // semicolon file with decimal commas; line 4 has a field missing, line 6 a quoted
        // field over two lines.
        let (t, d) = read(
            "date;weight;unit\r2026-04-01;72,5;kg\r\r2026-04-02;72\r2026-04-03;\"71,5\";kg\r2026-04-04;71;\"k\rg\"\r2026-04-05;70,5;kg\r",
            &CsvOptions::default(),
        );
        let t = t.unwrap();
        assert_eq!(t.delimiter, b';');
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].line, Some(4), "{}", d[0]);
        assert_eq!(
            t.rows.iter().map(|r| r.line).collect::<Vec<_>>(),
            vec![2, 5, 6, 8]
        );
    }
    #[test]
    fn missing_column_is_an_error_naming_it() {
        let (t, d) = read("date,weight\n2026-04-01,72\n", &CsvOptions::default());
        assert!(t.is_none());
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert!(d[0].message.contains("`unit`"), "{}", d[0]);
        assert_eq!(d[0].line, Some(1));
    }

    /// A date column under a name no list holds (`When`, `Messdatum`) beside columns that are
    /// not ours either was refused as "missing required columns `date`, `weight`" at no
    /// column, with the header as found and `columns date, weight, unit` as expected: nothing
    /// said which columns had been read, as what, or which other names the missing ones may
    /// have. Now the message points at the first column not read, says what each column was
    /// read as, and names the other headers each missing column is read under.
    #[test]
    fn missing_columns_name_what_was_read_and_the_names_accepted() {
        let opts = CsvOptions::default();
        let read = |text: &str, opts: &CsvOptions| {
            let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
            let mut d = Vec::new();
            let t = read_table(
                text,
                &crate::participant::records::WEIGHTS,
                opts,
                &ctx,
                &mut d,
            );
            (t, d)
        };
        let (t, d) = read("When,Value,Units\n2026-04-01,72.5,kg\n", &opts);
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        let e = &d[0];
        assert_eq!(
            e.message,
            "missing required columns `date`, `weight`; the file is not used"
        );
        assert_eq!((e.line, e.column), (Some(1), Some(1)));
        assert_eq!(
            e.found.as_deref(),
            Some(
                "`When,Value,Units`: read: `Units` (column 3) as `unit`; not read: `When` (column 1), `Value` (column 2)"
            )
        );
        assert_eq!(
            e.expected.as_deref(),
            Some(
                "columns date, weight, unit (optional: time, source); `date` may also be headed `day`, `datetime`, `date_time`, `timestamp`, `measured_at`, `start_time`, `datum`; `weight` may also be headed `body_weight`, `bodyweight`, `mass`, `body_mass`, `weight_body_mass`, `gewicht` (any case; a space for `_`)"
            )
        );
        let (_, d) = read("Messdatum;Wert;Masseinheit\n2026-04-01;72,5;kg\n", &opts);
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(1)));
        assert_eq!(
            d[0].found.as_deref(),
            Some("`Messdatum;Wert;Masseinheit`: no column read as one of ours")
        );
        assert!(
            d[0].expected
                .as_deref()
                .unwrap()
                .contains("`unit` may also be headed `weight_unit`, `units`, `einheit`"),
            "{}",
            d[0]
        );
        // A date found by its cells is named as read; the missing unit is pointed at the
        // weight column, whose header or cells may carry it.
        let (_, d) = read("Recorded,Mass\n2026-04-01,72.5\n", &opts);
        assert_eq!(
            d[0].message,
            "missing required column `unit`; the file is not used"
        );
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(2)));
        assert_eq!(
            d[0].found.as_deref(),
            Some(
                "`Recorded,Mass`: read: `Recorded` (column 1) as `date` by its cells, `Mass` (column 2) as `weight`"
            )
        );
    }

    #[test]
    fn an_empty_file_is_named_and_a_header_only_file_is_not() {
        for (text, found) in [("", "an empty file"), ("\n\r\n \n", "3 blank line(s)")] {
            let (t, d) = read(text, &CsvOptions::default());
            assert!(t.is_none(), "{text:?}");
            assert_eq!(d.len(), 1, "{d:?}");
            assert_eq!(d[0].severity, crate::diag::Severity::Error);
            assert_eq!(d[0].file, "participants/P1/weights.csv");
            assert_eq!(d[0].line, Some(1));
            assert!(
                d[0].expected.as_deref().unwrap().contains("header line"),
                "{}",
                d[0]
            );
            assert!(
                d[0].expected.as_deref().unwrap().contains("date"),
                "{}",
                d[0]
            );
            assert_eq!(d[0].found.as_deref(), Some(found));
        }
        assert!(
            read("", &CsvOptions::default()).1[0]
                .message
                .contains("the file is empty;")
        );
        let (t, d) = read("date,weight,unit\n", &CsvOptions::default());
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.unwrap().rows.len(), 0);
    }

    #[test]
    fn header_missing_is_recognised() {
        let (t, d) = read("2026-04-01,72,kg\n", &CsvOptions::default());
        assert!(t.is_none());
        assert!(
            d[0].hint.as_deref().unwrap().contains("looks like data"),
            "{}",
            d[0]
        );
    }

    #[test]
    fn extra_and_duplicate_columns() {
        // A header that may be one of ours misspelt (`sorce`) or holds one as a word (`Weight
        // 2`) is warned about; other programs' columns (a scale's body-composition export) are
        // named in one note: they change no figure, and a warning each made every run on such
        // an export end "with warnings" (exit 1).
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let t = read_table(
            "date,weight,unit,sorce,Fat mass (kg),Weight 2,Bone mass (kg),Comments\n2026-04-01,72,kg,x,20,71,3,ok\n",
            &SPEC,
            &CsvOptions::default(),
            &ctx,
            &mut d,
        );
        assert!(t.is_some());
        assert_eq!(d.len(), 2, "{d:?}");
        assert!(
            d.iter()
                .all(|x| x.severity == crate::diag::Severity::Warning)
        );
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(4)));
        assert_eq!(d[0].message, "extra column `sorce` is ignored");
        assert_eq!((d[1].line, d[1].column), (Some(1), Some(6)));
        let notes = ctx.take_notes();
        assert_eq!(notes.len(), 1, "{notes:?}");
        assert_eq!(
            notes[0].message,
            "columns `Fat mass (kg)`, `Bone mass (kg)`, `Comments` are not read (the columns read are date, weight, unit (optional: time, source))"
        );
        let (t, d) = read("date,weight,unit,weight\n", &CsvOptions::default());
        assert!(t.is_none());
        assert!(d[0].message.contains("appears twice"));
    }

    #[test]
    fn a_standard_exports_note_and_meal_columns_are_not_taken_for_ours_misspelt() {
        // A scale's `Note` is two letters from `date`, a food diary's `Meal` two from `kcal`:
        // half of a four-letter word, and each was warned about as ours misspelt, so every
        // run on such an export ended "with warnings" (exit 1). Two letters swapped in a
        // four-letter name (`tiem`) still are.
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let t = read_table(
            "date,weight,unit,Note,tiem\n2026-04-01,72,kg,after gym,07:10\n",
            &SPEC,
            &CsvOptions::default(),
            &ctx,
            &mut d,
        );
        assert!(t.is_some());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].message, "extra column `tiem` is ignored");
        let notes = ctx.take_notes();
        assert_eq!(notes.len(), 1, "{notes:?}");
        assert!(notes[0].message.contains("`Note`"), "{notes:?}");
        let spec = crate::program::files::INTAKE;
        let ctx = FileCtx::new("P1", "participants/P1/intake.csv");
        let mut d = Vec::new();
        let t = read_table(
            "date,Meal,kcal\n2026-04-01,Lunch,610\n",
            &spec,
            &CsvOptions::default(),
            &ctx,
            &mut d,
        );
        assert!(t.is_some());
        assert!(d.is_empty(), "{d:?}");
    }

    /// A quote left open in a value (`"81,4`) takes every line after it into that field,
    /// up to where a quote closes it or the end of the file: the row is dropped with those
    /// lines, and the message said only "2 fields", though two more weigh-ins were lost.
    #[test]
    fn a_quote_left_open_names_the_lines_it_took_with_it() {
        let (t, d) = read(
            "date,Weight,unit\n2026-05-01,81.2,kg\n2026-05-02,\"81,4,kg\n2026-05-03,81.0,kg\n\
             2026-05-04,80.9,kg\n",
            &CsvOptions::default(),
        );
        assert_eq!(t.unwrap().rows.len(), 1);
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!((d[0].line, d[0].column), (Some(3), Some(2)));
        assert!(
            d[0].message.ends_with(
                "the row is dropped, and with it the 2 lines below it (lines 4–5): a quote \
                 (`\"`) in field 2 (`Weight`) is closed only there, or never, so they were read \
                 into that field"
            ),
            "{}",
            d[0]
        );
        assert!(d[0].hint.as_deref().unwrap().starts_with("close the quote"));
        // A quote closed one line below takes that one line.
        let (_, d) = read(
            "date,weight,unit\n2026-05-02,\"81,4,kg\n2026-05-03\",81.0,kg,x\n2026-05-04,80.9,kg\n",
            &CsvOptions::default(),
        );
        assert!(
            d.iter()
                .any(|d| d.line == Some(2) && d.message.contains("the line below it (line 3)")),
            "{d:?}"
        );
    }

    #[test]
    fn wrong_field_count_is_dropped_with_decimal_comma_hint() {
        let (t, d) = read(
            "date,weight,unit\n2026-04-01,72,5,kg\n2026-04-02,72\n2026-04-03,71,kg\n",
            &CsvOptions::default(),
        );
        let t = t.unwrap();
        assert_eq!(t.rows.len(), 1);
        assert_eq!(t.rows[0].line, 4);
        assert_eq!(d.len(), 2);
        assert_eq!(d[0].line, Some(2));
        assert!(
            d[0].message.contains("4 fields but the header has 3"),
            "{}",
            d[0]
        );
        // At the first field beyond the header (it had a line only).
        assert_eq!(d[0].column, Some(4));
        assert!(d[0].hint.as_deref().unwrap().contains("decimal comma"));
        assert_eq!(d[1].line, Some(3));
        assert!(!d[1].hint.as_deref().unwrap().contains("decimal comma"));
    }

    #[test]
    fn header_only_files_have_no_rows() {
        // An empty file is an error (`an_empty_file_is_named_and_a_header_only_file_is_not`).
        for text in [
            "date,weight,unit\n",
            "date,weight,unit",
            "\ndate,weight,unit\n",
        ] {
            let (t, d) = read(text, &CsvOptions::default());
            assert!(d.is_empty(), "{text:?}");
            assert!(t.unwrap().rows.is_empty());
        }
    }

    #[test]
    fn semicolon_files_are_recognised() {
        // Recognised per file: the comma is then a decimal comma.
        let opts = CsvOptions::default();
        let (t, d) = read("date;weight;unit\n2026-04-01;72,5;kg\n", &opts);
        assert!(d.is_empty(), "{d:?}");
        let t = t.unwrap();
        assert_eq!(t.delimiter, b';');
        let ctx = FileCtx::new("P1", "w.csv");
        let cells = Cells {
            table: &t,
            row: &t.rows[0],
            ctx: &ctx,
            opts: &opts,
        };
        let mut d = Vec::new();
        assert_eq!(cells.number("weight", &mut d), Some(72.5));
        assert!(d.is_empty());
        t.describe(&opts, &ctx);
        assert_eq!(
            ctx.take_notes()[0].message,
            "read as semicolon-separated with decimal commas"
        );
        // A comma fixed in program.yaml on a semicolon file: the hint names the fix.
        let comma = CsvOptions {
            delimiter: Some(b','),
            ..Default::default()
        };
        let (t, d) = read("date;weight;unit\n2026-04-01;72,5;kg\n", &comma);
        assert!(t.is_none());
        assert!(d[0].hint.as_deref().unwrap().contains("';'"), "{}", d[0]);
    }

    #[test]
    fn delimiters_are_sniffed_from_the_first_lines() {
        assert_eq!(sniff_delimiter("a,b,c\n1,2,3\n"), Some(b','));
        assert_eq!(sniff_delimiter("a;b;c\n1;2,5;3\n"), Some(b';'));
        assert_eq!(sniff_delimiter("a\tb\n1,5\t2\n"), Some(b'\t'));
        // Header-less semicolon data with decimal commas: two semicolons per line beat one comma.
        assert_eq!(
            sniff_delimiter("2026-04-01;70,6;kg\n2026-04-02;70,4;kg\n"),
            Some(b';')
        );
        // Quoted delimiters do not count.
        assert_eq!(sniff_delimiter("\"a;b\",c\n\"x;y\",z\n"), Some(b','));
        assert_eq!(sniff_delimiter("weight\n72\n"), None);
    }

    /// A date column under a name of no list (`Recorded`, `Measurement time`, or `Time` holding
    /// whole date-times, as scale exports write them) was a "missing required column `date`"
    /// and the file was not used. The one column whose cells are all dates is the date; two
    /// such columns are refused with both named, and a `Time` column with times alone stays
    /// refused.
    #[test]
    fn the_one_column_of_dates_under_another_name_is_the_date() {
        let spec = crate::participant::records::WEIGHTS;
        let opts = CsvOptions::default();
        let ctx = FileCtx::new("P1", "w.csv");
        for header in ["Recorded", "Measurement time", "Time"] {
            let mut d = Vec::new();
            let text = format!(
                "{header},Weight (kg),Comment\n2026-04-01 07:12,72.5,after run\n2026-04-03 07:40,72.1,\n"
            );
            let t = read_table(&text, &spec, &opts, &ctx, &mut d).unwrap();
            assert!(d.is_empty(), "{header}: {d:?}");
            assert_eq!(t.rows.len(), 2);
            assert_eq!(t.get(&t.rows[1], "date"), Some("2026-04-03 07:40"));
            assert_eq!(t.get(&t.rows[1], "time"), None);
            assert_eq!(t.column("date"), Some(1));
            let notes = ctx.take_notes();
            assert!(
                notes.iter().any(|n| n.message
                    == format!("column `{header}` read as `date`: no column is named as the date, and it is the only one whose cells are dates")),
                "{notes:?}"
            );
        }
        let mut d = Vec::new();
        let t = read_table(
            "Start,End,Weight (kg)\n2026-04-01 07:12,2026-04-01 07:13,72.5\n",
            &spec,
            &opts,
            &ctx,
            &mut d,
        );
        assert!(t.is_none());
        assert_eq!(
            d[0].message,
            "missing required column `date`; the file is not used"
        );
        assert!(
            d[0].hint
                .as_deref()
                .unwrap()
                .starts_with("columns `Start` and `End` each hold dates"),
            "{:?}",
            d[0].hint
        );
        // One mistyped date of twelve costs its row, with the date's warning, not the file.
        let mut d = Vec::new();
        let mut text = "Recorded,Weight (kg)\n".to_string();
        for k in 1..=12 {
            let day = if k == 7 {
                "2026-04-3x".to_string()
            } else {
                format!("2026-04-{k:02}")
            };
            text.push_str(&format!("{day},72.{k}\n"));
        }
        let t = read_table(&text, &spec, &opts, &ctx, &mut d).unwrap();
        assert_eq!((t.rows.len(), t.column("date")), (12, Some(1)));
        ctx.take_notes();
        let mut d = Vec::new();
        let t = read_table("Time,Weight (kg)\n07:12,72.5\n", &spec, &opts, &ctx, &mut d);
        assert!(t.is_none());
        assert_eq!(
            d[0].message,
            "missing required column `date`; the file is not used"
        );
        ctx.take_notes();
    }

    /// Accents are folded in header names, so an accented header matches its alias written
    /// without them: a French food app's `Énergie (kcal)` was refused for a missing `kcal`,
    /// since `header_key` kept the accent (`énergie`) and the alias is `energie`; written as
    /// `E` and a combining accent, it split into `e_nergie`.
    #[test]
    fn accented_headers_match_their_aliases() {
        assert_eq!(
            header_key("Énergie (kcal)"),
            ("energie".into(), Some("kcal".into()))
        );
        assert_eq!(header_key("E\u{301}nergie").0, "energie");
        assert_eq!(header_key("Größe").0, "große");
        let opts = CsvOptions::default();
        let ctx = FileCtx::new("P1", "intake.csv");
        for header in ["Date;Énergie (kcal)", "Date;E\u{301}nergie (kcal)"] {
            let mut d = Vec::new();
            let t = read_table(
                &format!("{header}\n2026-04-01;1850\n"),
                &crate::participant::records::INTAKE,
                &opts,
                &ctx,
                &mut d,
            )
            .unwrap_or_else(|| panic!("{header}: {d:?}"));
            assert!(d.is_empty(), "{header}: {d:?}");
            assert_eq!(t.get(&t.rows[0], "kcal"), Some("1850"), "{header}");
            ctx.take_notes();
        }
    }

    #[test]
    fn headers_with_units_aliases_and_program_mappings() {
        let spec = crate::participant::records::WEIGHTS;
        let mut map = ColumnMap::new();
        map.insert(header_key("Measured").0, "date".into());
        let mut columns = BTreeMap::new();
        columns.insert("weights".to_string(), map);
        let opts = CsvOptions {
            columns: Arc::new(columns),
            ..Default::default()
        };
        let ctx = FileCtx::new("P1", "w.csv");
        let mut d = Vec::new();
        let t = read_table(
            "Measured,Weight (lb),Device\n2026-04-01,160,scale\n",
            &spec,
            &opts,
            &ctx,
            &mut d,
        )
        .unwrap();
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.header_unit("weight"), Some("lb"));
        assert_eq!(t.get(&t.rows[0], "source"), Some("scale"));
        t.describe(&opts, &ctx);
        assert_eq!(
            ctx.take_notes()[0].message,
            "column `Measured` read as `date`; column `Device` read as `source`; `weight` in lb (from the header)"
        );
        // A unit as a suffix, and a unit the column cannot have.
        let t = read_table(
            "date,weight_kg\n2026-04-01,72\n",
            &spec,
            &opts,
            &ctx,
            &mut d,
        )
        .unwrap();
        assert_eq!(t.header_unit("weight"), Some("kg"));
        // Kilojoules are named as such, with their conversion (the note said "`kcal` in kj").
        let t = read_table(
            "date,Energy (kJ)\n2026-04-01,8000\n",
            &crate::participant::records::INTAKE,
            &opts,
            &ctx,
            &mut d,
        )
        .unwrap();
        t.describe(&opts, &ctx);
        assert_eq!(
            ctx.take_notes()
                .iter()
                .map(|n| n.message.as_str())
                .collect::<Vec<_>>(),
            [
                "column `Energy (kJ)` read as `kcal`; `kcal` in kJ (from the header), converted to kcal at 4.184 kJ/kcal"
            ]
        );
        assert!(read_table("date,Weight (oz)\n", &spec, &opts, &ctx, &mut d).is_none());
        assert!(d[0].message.contains("unit `oz`"), "{}", d[0]);
        assert_eq!(
            header_key(" Body-Weight [KG] "),
            ("body_weight".into(), Some("kg".into()))
        );
    }

    #[test]
    fn a_unit_named_by_the_program_mapping_stands_for_a_unit_the_file_does_not_name() {
        // A bathroom scale app's `Date,Weight` with bare numbers: the unit was refused in every
        // file, and program.yaml had no way to say it once.
        let spec = crate::participant::records::WEIGHTS;
        let ctx = FileCtx::new("P1", "w.csv");
        let mut columns = BTreeMap::new();
        columns.insert(
            "weights".to_string(),
            [("weight".to_string(), "weight (kg)".to_string())].into(),
        );
        let opts = CsvOptions {
            columns: Arc::new(columns),
            ..Default::default()
        };
        let mut d = Vec::new();
        let t = read_table("Date,Weight\n2026-04-01,72.5\n", &spec, &opts, &ctx, &mut d);
        assert!(d.is_empty(), "{d:?}");
        let t = t.unwrap();
        assert_eq!(t.header_unit("weight"), Some("kg"));
        t.describe(&opts, &ctx);
        assert_eq!(
            ctx.take_notes()[0].message,
            "`weight` in kg (from program.yaml's `input.columns`)"
        );
        // A file that names its unit, in the header or in a unit column, keeps its own.
        let t = read_table(
            "Date,Weight (lb)\n2026-04-01,160\n",
            &spec,
            &opts,
            &ctx,
            &mut d,
        );
        assert_eq!(t.unwrap().header_unit("weight"), Some("lb"));
        let t = read_table(
            "date,weight,unit\n2026-04-01,160,lb\n",
            &spec,
            &opts,
            &ctx,
            &mut d,
        );
        assert_eq!(t.unwrap().header_unit("weight"), None);
        assert!(d.is_empty(), "{d:?}");
        // The suffix form maps too; a unit the column cannot take is no mapping.
        assert_eq!(
            spec.mapping_target("weight_lb"),
            Some(("weight", Some("lb".into())))
        );
        assert_eq!(
            spec.mapping_target("Weight [st]"),
            Some(("weight", Some("st".into())))
        );
        assert_eq!(spec.mapping_target("weight (oz)"), None);
        assert_eq!(spec.mapping_target("unit (kg)"), None);
        assert_eq!(spec.mapping_target("date"), Some(("date", None)));
    }

    #[test]
    fn a_sep_line_names_the_delimiter_and_is_not_read() {
        // Spreadsheets write `sep=;` above the header; the file was refused with the line taken
        // for its header (`missing required columns date, weight, unit; found: sep=`).
        let opts = CsvOptions::default();
        let ctx = FileCtx::new("P1", "w.csv");
        for text in [
            "sep=;\ndate;weight;unit\n2026-04-01;72,5;kg\n",
            "\u{feff}SEP=;\r\ndate;weight;unit\r\n2026-04-01;72,5;kg\r\n",
        ] {
            let (t, d) = read(text, &opts);
            assert!(d.is_empty(), "{d:?}");
            let t = t.unwrap();
            assert_eq!((t.delimiter, t.header_line, t.rows.len()), (b';', 2, 1));
            let cells = Cells {
                table: &t,
                row: &t.rows[0],
                ctx: &ctx,
                opts: &opts,
            };
            let mut d = Vec::new();
            assert_eq!(cells.number("weight", &mut d), Some(72.5));
        }
        // The line wins over a delimiter set in program.yaml: it is the file's own word.
        let comma = CsvOptions {
            delimiter: Some(b','),
            ..Default::default()
        };
        let (t, _) = read("sep=\t\ndate\tweight\tunit\n2026-04-01\t72.5\tkg\n", &comma);
        assert_eq!(t.unwrap().delimiter, b'\t');
        assert_eq!(sep_line("sep=\"\n"), None);
        assert_eq!(sep_line("separated,by\n"), None);
    }

    #[test]
    fn quoted_decimal_commas_in_a_comma_file_are_read_unless_they_could_group_thousands() {
        // A spreadsheet of a decimal-comma locale exports `"72,5"`: every row was dropped.
        let opts = CsvOptions::default();
        let ctx = FileCtx::new("P1", "w.csv");
        let (t, d) = read(
            "date,weight,unit\n2026-04-01,\"72,5\",kg\n2026-04-02,\"72,500\",kg\n2026-04-03,\"72,4567\",kg\n",
            &opts,
        );
        assert!(d.is_empty(), "{d:?}");
        let t = t.unwrap();
        let mut d = Vec::new();
        let read_row = |i: usize, d: &mut Vec<Diagnostic>| {
            Cells {
                table: &t,
                row: &t.rows[i],
                ctx: &ctx,
                opts: &opts,
            }
            .number("weight", d)
        };
        assert_eq!(read_row(0, &mut d), Some(72.5));
        assert_eq!(read_row(2, &mut d), Some(72.4567));
        assert!(d.is_empty(), "{d:?}");
        // Three digits after the comma could be a thousands group: not guessed.
        assert_eq!(read_row(1, &mut d), None);
        assert!(d[0].message.contains("decimal comma"), "{}", d[0]);
    }

    #[test]
    fn date_times_give_the_local_day() {
        let opts = CsvOptions::default();
        let day = |s: &str, o: &CsvOptions| {
            parse_when(s, o).map(|w| (w.date.to_string(), w.time.map(|t| t.to_string())))
        };
        let some = |d: &str, t: &str| Some((d.to_string(), Some(t.to_string())));
        assert_eq!(
            day("2027-03-01T07:12:00Z", &opts),
            some("2027-03-01", "07:12:00")
        );
        assert_eq!(
            day("2027-03-01 07:12", &opts),
            some("2027-03-01", "07:12:00")
        );
        assert_eq!(
            day("2027-03-01T23:30:00-05:00", &opts),
            some("2027-03-01", "23:30:00")
        );
        assert_eq!(
            day("2027-03-01T23:30:00.250+0100", &opts),
            some("2027-03-01", "23:30:00.250")
        );
        assert_eq!(day("2027-03-01", &opts), Some(("2027-03-01".into(), None)));
        // UTC times are converted to the participants' zone (DST applies: 2027-07-01 is
        // UTC−4 in New York; 2027-01-15 is UTC−5).
        let ny = CsvOptions {
            time_zone: LocalZone::parse("America/New_York"),
            ..Default::default()
        };
        assert_eq!(
            day("2027-07-02T02:30:00Z", &ny),
            some("2027-07-01", "22:30:00")
        );
        assert_eq!(
            day("2027-01-15T04:30:00Z", &ny),
            some("2027-01-14", "23:30:00")
        );
        // A time with its own offset stays on the day it was written.
        assert_eq!(
            day("2027-07-02T02:30:00+02:00", &ny),
            some("2027-07-02", "02:30:00")
        );
        let fixed = CsvOptions {
            time_zone: LocalZone::parse("+09:30"),
            ..Default::default()
        };
        assert_eq!(
            day("2027-07-01T20:00:00Z", &fixed),
            some("2027-07-02", "05:30:00")
        );
        // A program format with a time.
        let us = CsvOptions {
            date_format: "%m/%d/%Y %I:%M %p".into(),
            ..Default::default()
        };
        assert_eq!(
            day("03/01/2027 07:12 PM", &us),
            some("2027-03-01", "19:12:00")
        );
        assert!(parse_when("2027-02-30T07:00:00Z", &opts).is_none());
        assert!(LocalZone::parse("Mars/Olympus").is_none());
        // The word UTC or GMT after the time is an offset of zero, like `Z`.
        assert_eq!(
            day("2027-07-02 02:30:00 UTC", &ny),
            some("2027-07-01", "22:30:00")
        );
        assert_eq!(
            day("2027-07-02 02:30 gmt", &opts),
            some("2027-07-02", "02:30:00")
        );
        assert!(parse_when("2027-07-02 02:30:00 CET", &opts).is_none());
        // ISO 8601's basic format, only near the program's dates.
        let program = CsvOptions {
            program_span: Some((
                NaiveDate::from_ymd_opt(2027, 1, 1).unwrap(),
                NaiveDate::from_ymd_opt(2027, 6, 30).unwrap(),
            )),
            ..Default::default()
        };
        assert_eq!(day("20270301", &program), Some(("2027-03-01".into(), None)));
        assert!(parse_when("20270301", &opts).is_none());
        assert!(parse_when("20350301", &program).is_none());
        assert!(parse_when("20270230", &program).is_none());
        // Forms that cost every row of their files: the e-mail header date-time (RFC 5322
        // §3.3; UTC converted to the program's zone like `Z`), an ISO date with a 12-hour
        // clock, a weekday without a comma (which must still be the date's), year-first dots.
        assert_eq!(
            day("Fri, 02 Jul 2027 07:12:00 +0200", &ny),
            some("2027-07-02", "07:12:00")
        );
        assert_eq!(
            day("Fri, 02 Jul 2027 02:30:00 GMT", &ny),
            some("2027-07-01", "22:30:00")
        );
        assert_eq!(
            day("2027-03-01 7:12 PM", &opts),
            some("2027-03-01", "19:12:00")
        );
        assert_eq!(
            day("Mon Mar 01 2027", &opts),
            Some(("2027-03-01".into(), None))
        );
        assert!(parse_when("Tue Mar 01 2027", &opts).is_none());
        assert_eq!(day("2027.03.01", &opts), Some(("2027-03-01".into(), None)));
        assert!(parse_when("2027.13.01", &opts).is_none());
    }

    /// The (day, time of day) each row of `t` is read on.
    fn days_read(
        t: &Table,
        ctx: &FileCtx,
        opts: &CsvOptions,
        d: &mut Vec<Diagnostic>,
    ) -> Vec<(String, Option<String>)> {
        t.rows
            .iter()
            .map(|row| {
                let c = Cells {
                    table: t,
                    row,
                    ctx,
                    opts,
                };
                let w = c.when("date", d).unwrap();
                (w.date.to_string(), w.time.map(|x| x.to_string()))
            })
            .collect()
    }

    /// Daylight-saving days with `input.time_zone`. Expected local times from Python 3's
    /// `zoneinfo` (IANA tzdata): Europe/Berlin changes on 2026-03-29 and 2026-10-25 at 01:00 UTC,
    /// America/New_York on 2026-03-08 at 07:00 UTC and 2026-11-01 at 06:00 UTC.
    /// The rule: a UTC time is converted with the offset in force at that instant (a fixed
    /// winter or summer offset would put late-evening weigh-ins on the wrong day); a local time
    /// written without an offset is never converted, so one that does not exist (02:30 on a
    /// spring-forward day, a clock not yet changed) or exists twice (01:30 on a fall-back day)
    /// stays on the day and at the time written; a time with its own offset stays on its day.
    #[test]
    fn daylight_saving_days_keep_each_weigh_in_on_its_local_day() {
        let zone = |z: &str| CsvOptions {
            time_zone: LocalZone::parse(z),
            program_span: Some((
                NaiveDate::from_ymd_opt(2026, 1, 1).unwrap(),
                NaiveDate::from_ymd_opt(2026, 12, 31).unwrap(),
            )),
            ..Default::default()
        };
        let at = |s: &str, o: &CsvOptions| {
            let w = parse_when(s, o).unwrap_or_else(|| panic!("{s} reads"));
            (w.date.to_string(), w.time.map(|t| t.to_string()))
        };
        let some = |d: &str, t: &str| (d.to_string(), Some(t.to_string()));
        let berlin = zone("Europe/Berlin");
        for (written, day, time) in [
            // Written local times, including one that does not exist and one that exists twice.
            ("2026-03-29 02:30", "2026-03-29", "02:30:00"),
            ("2026-03-29T02:30:00", "2026-03-29", "02:30:00"),
            ("2026-10-25 02:30", "2026-10-25", "02:30:00"),
            ("29.03.2026 02:30", "2026-03-29", "02:30:00"),
            // UTC across the change.
            ("2026-03-28T23:30:00Z", "2026-03-29", "00:30:00"),
            ("2026-03-29T00:59:00Z", "2026-03-29", "01:59:00"),
            ("2026-03-29T01:00:00Z", "2026-03-29", "03:00:00"),
            ("2026-03-29T22:30:00Z", "2026-03-30", "00:30:00"),
            ("2026-10-24T22:30:00Z", "2026-10-25", "00:30:00"),
            ("2026-10-25T00:30:00Z", "2026-10-25", "02:30:00"),
            ("2026-10-25T01:30:00Z", "2026-10-25", "02:30:00"),
            ("2026-10-25T22:30:00Z", "2026-10-25", "23:30:00"),
            ("2026-03-29 22:30:00 UTC", "2026-03-30", "00:30:00"),
            // Offsets across the change (the device's own): the day as written.
            ("2026-03-29T02:30:00+01:00", "2026-03-29", "02:30:00"),
            ("2026-03-29T00:30:00+02:00", "2026-03-29", "00:30:00"),
            ("2026-10-25T02:30:00+02:00", "2026-10-25", "02:30:00"),
            ("2026-10-25T02:30:00+01:00", "2026-10-25", "02:30:00"),
            ("2026-10-25T23:30:00+02:00", "2026-10-25", "23:30:00"),
        ] {
            assert_eq!(at(written, &berlin), some(day, time), "Berlin {written}");
        }
        let ny = zone("America/New_York");
        for (written, day, time) in [
            ("2026-03-08 02:30", "2026-03-08", "02:30:00"),
            ("2026-11-01 01:30", "2026-11-01", "01:30:00"),
            ("2026-03-08T04:30:00Z", "2026-03-07", "23:30:00"),
            ("2026-03-08T07:30:00Z", "2026-03-08", "03:30:00"),
            ("2026-03-09T04:30:00Z", "2026-03-09", "00:30:00"),
            ("2026-11-01T05:30:00Z", "2026-11-01", "01:30:00"),
            ("2026-11-01T06:30:00Z", "2026-11-01", "01:30:00"),
            ("2026-11-02T04:30:00Z", "2026-11-01", "23:30:00"),
            ("2026-11-01T01:30:00-04:00", "2026-11-01", "01:30:00"),
            ("2026-11-01T01:30:00-05:00", "2026-11-01", "01:30:00"),
        ] {
            assert_eq!(at(written, &ny), some(day, time), "New York {written}");
        }
        // `Date (UTC)` headers and Unix seconds are UTC too: converted the same way.
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        // 1774823400 = 2026-03-29 22:30 UTC.
        let text = "Date (UTC),weight,unit\n2026-03-29 22:30,70,kg\n2026-03-29 21:30,70,kg\n2026-10-25 22:30,70,kg\n";
        let t = read_table(text, &SPEC, &berlin, &ctx, &mut d).unwrap();
        let days = days_read(&t, &ctx, &berlin, &mut d);
        assert_eq!(
            days,
            [
                some("2026-03-30", "00:30:00"),
                some("2026-03-29", "23:30:00"),
                some("2026-10-25", "23:30:00"),
            ]
        );
        let t = read_table(
            "date,weight,unit\n1774823400,70,kg\n",
            &SPEC,
            &berlin,
            &ctx,
            &mut d,
        )
        .unwrap();
        assert_eq!(
            days_read(&t, &ctx, &berlin, &mut d),
            [some("2026-03-30", "00:30:00")]
        );
        assert!(d.is_empty(), "{d:?}");
    }

    #[test]
    fn a_date_header_that_says_utc_makes_its_times_utc() {
        // `Date (UTC)` with times without an offset: 23:30 UTC is 07:30 the next day in
        // Singapore; it counted on the day before, as local time.
        let sg = CsvOptions {
            time_zone: LocalZone::parse("Asia/Singapore"),
            ..Default::default()
        };
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let text = "Date (UTC),weight,unit\n2026-09-01 23:30,70,kg\n2026-09-03T23:30:00+08:00,70,kg\n2026-09-04 06:00,70,kg\n";
        let t = read_table(text, &SPEC, &sg, &ctx, &mut d).unwrap();
        assert!(d.is_empty(), "{d:?}");
        let days = days_read(&t, &ctx, &sg, &mut d);
        assert_eq!(
            days,
            [
                ("2026-09-02".to_string(), Some("07:30:00".to_string())),
                // Its own offset is kept: the day as written.
                ("2026-09-03".to_string(), Some("23:30:00".to_string())),
                ("2026-09-04".to_string(), Some("14:00:00".to_string())),
            ]
        );
        // Without the word in the header, times without an offset are local (as before).
        let t = read_table(
            &text.replace("Date (UTC)", "Date"),
            &SPEC,
            &sg,
            &ctx,
            &mut d,
        )
        .unwrap();
        let c = Cells {
            table: &t,
            row: &t.rows[0],
            ctx: &ctx,
            opts: &sg,
        };
        assert_eq!(
            c.when("date", &mut d).unwrap().date.to_string(),
            "2026-09-01"
        );
    }

    #[test]
    fn bad_dates_suggest_the_format() {
        let opts = CsvOptions::default();
        // Day first on line 2, month first on line 4: no order reads the file, so each is
        // named with the format it fits.
        let (t, _) = read(
            "date,weight,unit\n13/04/2026,72,kg\n2026-02-30,72,kg\n04/13/2026,72,kg\n",
            &opts,
        );
        let t = t.unwrap();
        let ctx = FileCtx::new("P1", "w.csv");
        let mut d = Vec::new();
        for row in &t.rows {
            let cells = Cells {
                table: &t,
                row,
                ctx: &ctx,
                opts: &opts,
            };
            assert_eq!(cells.date("date", &mut d), None);
        }
        assert!(
            d[0].hint.as_deref().unwrap().contains("%d/%m/%Y"),
            "{}",
            d[0]
        );
        assert!(
            d[1].hint.as_deref().unwrap().contains("day exists"),
            "{}",
            d[1]
        );
        assert_eq!(
            d[1].expected.as_deref(),
            Some("a date like `2026-04-01` (format `%Y-%m-%d`) or an ISO 8601 date-time")
        );
        assert!(
            d[2].hint.as_deref().unwrap().contains("%m/%d/%Y"),
            "{}",
            d[2]
        );
    }

    #[test]
    fn numeric_dates_are_read_in_the_one_order_that_reads_them_all() {
        let opts = CsvOptions::default();
        let dates = |text: &str| {
            let (t, d) = read(text, &opts);
            let got = t.map(|t| {
                let ctx = FileCtx::new("P1", "w.csv");
                let mut d2 = Vec::new();
                let v: Vec<String> = t
                    .rows
                    .iter()
                    .map(|row| {
                        let c = Cells {
                            table: &t,
                            row,
                            ctx: &ctx,
                            opts: &opts,
                        };
                        let w = c.when("date", &mut d2).unwrap();
                        format!(
                            "{}{}",
                            w.date,
                            w.time.map(|t| format!(" {t}")).unwrap_or_default()
                        )
                    })
                    .collect();
                assert!(d2.is_empty(), "{d2:?}");
                v
            });
            (got, d)
        };
        // A US clinic export: 05/13 tells the order, so 05/01 is 1 May (not 5 January).
        let (got, d) = dates("date,weight,unit\n05/01/2026,90,kg\n05/13/2026 7:10 AM,89.5,kg\n");
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(got.unwrap(), ["2026-05-01", "2026-05-13 07:10:00"]);
        // A British spreadsheet with dashes: 13-05 tells, so 01-05 is 1 May.
        let (got, d) = dates("date,weight,unit\n01-05-2026,90,kg\n13-05-2026,89.5,kg\n");
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(got.unwrap(), ["2026-05-01", "2026-05-13"]);
        // Nothing tells: refused at the first date, naming both ways to settle it.
        let (got, d) = dates("date,weight,unit\n05/01/2026,90,kg\n06/01/2026,89.5,kg\n");
        assert!(got.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(1)));
        assert!(
            d[0].message.contains("day or its month comes first"),
            "{}",
            d[0]
        );
        assert!(
            d[0].hint.as_deref().unwrap().contains("%m/%d/%Y"),
            "{}",
            d[0]
        );
    }

    /// One date typed the other way round (`15/10/2026` in a US export of `10/13/2026` …) made
    /// no order read every date, and every row of the file was dropped as an "unreadable date"
    /// that named neither the order nor the slip. Nine in ten of the dates that tell read one
    /// way: the file is read so, and the slip costs its row, named with both readings.
    #[test]
    fn one_date_typed_the_other_way_round_costs_its_row_not_the_file() {
        let opts = CsvOptions::default();
        let read_all = |text: &str| {
            let (t, d) = read(text, &opts);
            assert!(d.is_empty(), "{d:?}");
            let t = t.expect("the file is read");
            let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
            let mut warnings = Vec::new();
            let dates: Vec<Option<String>> = t
                .rows
                .iter()
                .map(|row| {
                    let c = Cells {
                        table: &t,
                        row,
                        ctx: &ctx,
                        opts: &opts,
                    };
                    c.date("date", &mut warnings).map(|x| x.to_string())
                })
                .collect();
            t.describe(&opts, &ctx);
            let notes: Vec<String> = ctx.take_notes().into_iter().map(|n| n.message).collect();
            (notes, dates, warnings)
        };
        // Month first: nine dates after the 12th, 10/05 (both ways), and 15/10 (day first only).
        let mut text = "date,weight,unit\n10/05/2026,90,kg\n".to_string();
        for day in 13..=21 {
            text.push_str(&format!("10/{day}/2026,89,kg\n"));
        }
        text.push_str("15/10/2026,88,kg\n");
        let (notes, dates, w) = read_all(&text);
        assert_eq!(dates[0].as_deref(), Some("2026-10-05"), "read month first");
        assert_eq!(dates[1].as_deref(), Some("2026-10-13"));
        assert_eq!(dates[10], None);
        assert_eq!(dates.iter().flatten().count(), 10);
        assert_eq!(w.len(), 1, "{w:?}");
        assert_eq!((w[0].line, w[0].column), (Some(12), Some(1)));
        assert!(
            w[0].message
                .contains("a date written day first while the file's other dates are month first"),
            "{}",
            w[0]
        );
        assert_eq!(
            w[0].found.as_deref(),
            Some("`15/10/2026`: no date read month first; read day first it is 2026-10-15")
        );
        assert!(
            w[0].expected
                .as_deref()
                .unwrap()
                .contains("`10/13/2026` = 2026-10-13"),
            "{}",
            w[0]
        );
        assert!(
            notes
                .join(" ")
                .contains("the order of all the file's dates but one"),
            "{notes:?}"
        );
        // Day first with dashes, one month-first slip: the same, the other way.
        let mut text = "date,weight,unit\n".to_string();
        for day in 13..=22 {
            text.push_str(&format!("{day}-10-2026,89,kg\n"));
        }
        text.push_str("10-23-2026,88,kg\n03-11-2026,87,kg\n");
        let (_, dates, w) = read_all(&text);
        assert_eq!(dates[10], None);
        assert_eq!(dates[11].as_deref(), Some("2026-11-03"), "read day first");
        assert_eq!(w.len(), 1, "{w:?}");
        assert_eq!(w[0].line, Some(12));
        // Split more evenly (two habits in one sheet, 8 against 2): no order is taken, and
        // each date that does not read is warned about, as before.
        let mut text = "date,weight,unit\n".to_string();
        for day in 13..=20 {
            text.push_str(&format!("10/{day}/2026,89,kg\n"));
        }
        text.push_str("21/10/2026,88,kg\n22/10/2026,88,kg\n");
        let (t, _) = read(&text, &opts);
        assert_eq!(t.expect("read").numeric_order, None);
    }

    /// Rows that may be dated after a withdrawal of consent are not read, so they do not tell
    /// the order of the file's dates either: a weigh-in synced on 13 November told that every
    /// earlier `05/01/2026` was day first. Without them nothing tells, and the file is refused
    /// as it would be had they never been synced.
    #[test]
    fn rows_after_a_withdrawal_do_not_decide_the_order_of_the_dates() {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let opts = CsvOptions::default();
        let text = "date,weight,unit\n05/01/2026,90,kg\n06/01/2026,89.5,kg\n13/11/2026,88,kg\n";
        let read_with = |withdrew: Option<NaiveDate>| {
            let ctx =
                FileCtx::new("P1", "participants/P1/weights.csv").with_consent_withdrawn(withdrew);
            let mut diags = Vec::new();
            let t = read_table(text, &SPEC, &opts, &ctx, &mut diags);
            (t, diags)
        };
        // Without a withdrawal, 13/11 tells day first.
        let (t, diags) = read_with(None);
        assert!(t.is_some() && diags.is_empty(), "{diags:?}");
        // Withdrawn on 1 July: 13/11/2026 is after it in every reading, and the rest tell
        // nothing, so the file is refused at its first date.
        let (t, diags) = read_with(Some(d("2026-07-01")));
        assert!(t.is_none());
        assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(1)));
        assert!(
            diags[0].message.contains("day or its month comes first"),
            "{}",
            diags[0]
        );
        // Withdrawn after 13 November: the row is read, and tells.
        let (t, diags) = read_with(Some(d("2026-11-30")));
        assert!(t.is_some() && diags.is_empty(), "{diags:?}");
    }

    /// A withdrawal near the start: `05/04/2026` is 5 April read day first, on or before a
    /// withdrawal on 12 April, and 4 May read month first. A row that only one reading puts
    /// after the withdrawal may be the person's own, and decides as it would had the later rows
    /// never been synced. Taking out every row that some reading put after it left no date to
    /// decide by: the file's rows were each warned about as an unreadable date, those of 14
    /// and 20 April (after the withdrawal in every reading) quoted among them. And a file whose
    /// every date lies after the withdrawal (a lab result synced in August) is read in an order
    /// that reads them, so its rows are left out as after the withdrawal, not warned about.
    #[test]
    fn a_withdrawal_near_the_start_leaves_the_file_as_if_later_rows_were_never_synced() {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let opts = CsvOptions::default();
        let read_with = |text: &str, withdrew: &str| {
            let ctx = FileCtx::new("P1", "participants/P1/weights.csv")
                .with_consent_withdrawn(Some(d(withdrew)));
            let mut diags = Vec::new();
            let t = read_table(text, &SPEC, &opts, &ctx, &mut diags);
            (t, diags)
        };
        let before = "date,weight,unit\n05/04/2026,90,kg\n07/04/2026,89.8,kg\n09/04/2026,89.5,kg\n";
        let synced = format!("{before}14/04/2026,89,kg\n20/04/2026,88.8,kg\n");
        let (t, alone) = read_with(before, "2026-04-12");
        assert!(t.is_none());
        assert_eq!((alone[0].line, alone[0].column), (Some(2), Some(1)));
        assert!(
            alone[0].message.contains("day or its month comes first"),
            "{}",
            alone[0]
        );
        // The same file with two rows after the withdrawal: the same refusal, word for word,
        // and nothing after 12 April quoted.
        let (t, diags) = read_with(&synced, "2026-04-12");
        assert!(t.is_none());
        let said = |v: &[Diagnostic]| v.iter().map(|x| x.to_string()).collect::<Vec<_>>();
        assert_eq!(said(&diags), said(&alone));
        // Only rows after the withdrawal: an order is found to read them, and no date of
        // theirs is given as its example.
        let text = "date,weight,unit\n15/08/2026,88,kg\n20/09/2026,87.5,kg\n";
        let (t, diags) = read_with(text, "2026-07-27");
        assert!(diags.is_empty(), "{diags:?}");
        let t = t.expect("read");
        assert_eq!(t.numeric_order, Some(NumericOrder::DayFirst));
        assert_eq!(t.numeric_example, None);
    }

    /// `05/01/26`: a two-digit year, in a program of 2026. Such dates were dropped row by row
    /// as unreadable. They are read in the one century and the one order that put every date
    /// of the file within the program; when both orders do, or no reading does, the file is
    /// refused at a date (line, column), never read on a guess.
    #[test]
    fn two_digit_years_are_read_only_when_the_program_places_them() {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let opts = CsvOptions {
            program_span: Some((d("2026-04-01"), d("2026-09-30"))),
            ..CsvOptions::default()
        };
        let dates = |text: &str| {
            let (t, diags) = read(text, &opts);
            let got = t.map(|t| {
                let ctx = FileCtx::new("P1", "w.csv");
                let mut d2 = Vec::new();
                let v: Vec<String> = t
                    .rows
                    .iter()
                    .map(|row| {
                        let c = Cells {
                            table: &t,
                            row,
                            ctx: &ctx,
                            opts: &opts,
                        };
                        c.when("date", &mut d2).unwrap().date.to_string()
                    })
                    .collect();
                assert!(d2.is_empty(), "{d2:?}");
                v
            });
            (got, diags)
        };
        // Month first, as 05/18 shows; 26 is 2026, the century the program is in.
        let (got, diags) =
            dates("date,weight,unit\n05/04/26,90,kg\n05/18/26,89.5,kg\n06/01/26 7:10 AM,89,kg\n");
        assert!(diags.is_empty(), "{diags:?}");
        assert_eq!(got.unwrap(), ["2026-05-04", "2026-05-18", "2026-06-01"]);
        // Nothing tells the order: refused at the first date, with the two-digit-year formats.
        let (got, diags) = dates("date,weight,unit\n04/05/26,90,kg\n05/06/26,89.5,kg\n");
        assert!(got.is_none());
        assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(1)));
        assert!(
            diags[0].hint.as_deref().unwrap().contains("%d/%m/%y"),
            "{}",
            diags[0]
        );
        // 2019 (or 2119) is no date of a 2026 program, whichever way round: refused at it.
        let (got, diags) = dates("date,weight,unit\n13/05/26,90,kg\n14/05/19,89.5,kg\n");
        assert!(got.is_none());
        assert_eq!(diags.len(), 1, "{diags:?}");
        assert_eq!((diags[0].line, diags[0].column), (Some(3), Some(1)));
        assert_eq!(diags[0].found.as_deref(), Some("`14/05/19`"));
        assert!(diags[0].message.contains("two-digit years"), "{}", diags[0]);
        // Without the program's dates a two-digit year cannot be placed (1926 or 2026?).
        let (t, diags) = read("date,weight,unit\n05/18/26,90,kg\n", &CsvOptions::default());
        assert!(t.is_none());
        assert!(diags[0].message.contains("two-digit years"), "{}", diags[0]);
        // Four-digit years are read as before, whatever the program's dates.
        let (got, diags) = dates("date,weight,unit\n05/18/2031,90,kg\n");
        assert!(diags.is_empty(), "{diags:?}");
        assert_eq!(got.unwrap(), ["2031-05-18"]);
    }

    /// `26-04-03` (two-digit year first, as some devices write it) was read by `%Y` as the
    /// year 26, and `03-04-26` as the year 3: every row dropped as "before enrolment", a
    /// message that named the wrong cause. `1-May-26` (a spreadsheet's `d-mmm-yy`) the same.
    /// Such dates are read in the one order and century that put them within the program, or
    /// the file is refused at the date that shows it, with both readings.
    #[test]
    fn two_digit_years_first_are_placed_or_refused_never_read_as_the_year_26() {
        let d = |s: &str| NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap();
        let opts = CsvOptions {
            program_span: Some((d("2026-04-01"), d("2026-09-30"))),
            ..CsvOptions::default()
        };
        let dates = |text: &str| {
            let (t, diags) = read(text, &opts);
            let got = t.map(|t| {
                let ctx = FileCtx::new("P1", "w.csv");
                let mut d2 = Vec::new();
                let v: Vec<String> = t
                    .rows
                    .iter()
                    .map(|row| {
                        let c = Cells {
                            table: &t,
                            row,
                            ctx: &ctx,
                            opts: &opts,
                        };
                        c.when("date", &mut d2).unwrap().date.to_string()
                    })
                    .collect();
                assert!(d2.is_empty(), "{d2:?}");
                v
            });
            (got, diags)
        };
        // Year first: 2026-04-03 is the only reading within the program (day first would be
        // 26 April 2003, month first has no 26th month).
        let (got, diags) = dates(
            "date,weight,unit\n26-04-03,90,kg\n26-04-05,89.5,kg\n26-4-8,89,kg\n26/04/10,89,kg\n",
        );
        assert!(diags.is_empty(), "{diags:?}");
        assert_eq!(
            got.unwrap(),
            ["2026-04-03", "2026-04-05", "2026-04-08", "2026-04-10"]
        );
        // `26-04-25` is 2026-04-25 year first and 2025-04-26 day first (within the year's
        // margin before the start): with no other date to tell, refused at it, both named.
        let (got, diags) = dates("date,weight,unit\n26-04-25,90,kg\n26-05-25,89.5,kg\n");
        assert!(got.is_none());
        assert_eq!(diags.len(), 1, "{diags:?}");
        assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(1)));
        assert_eq!(
            diags[0].message,
            "the dates have two-digit years and read within the program in more than one order: `26-04-25` is 2025-04-26 read day first and 2026-04-25 read year first, so its dates cannot be read without a guess; the file is not used"
        );
        assert!(
            diags[0].hint.as_deref().unwrap().contains(
                "`input.date_format: \"%d-%m-%y\"` (day first) or `\"%y-%m-%d\"` (year first)"
            ),
            "{}",
            diags[0]
        );
        // ... but one date that reads only year first (`26-04-15`: 2015 day first) tells.
        let (got, diags) = dates("date,weight,unit\n26-04-25,90,kg\n26-04-15,89.5,kg\n");
        assert!(diags.is_empty(), "{diags:?}");
        assert_eq!(got.unwrap(), ["2026-04-25", "2026-04-15"]);
        // `03-04-26`: day or month first (3 April or 4 March 2026), not the year 3.
        let (got, diags) = dates("date,weight,unit\n03-04-26,90,kg\n05-04-26,89.5,kg\n");
        assert!(got.is_none());
        assert_eq!((diags[0].line, diags[0].column), (Some(2), Some(1)));
        assert!(
            diags[0]
                .message
                .contains("whether its day or its month comes first"),
            "{}",
            diags[0]
        );
        // A month's name with a two-digit year, in the program's century.
        let (got, diags) = dates("date,weight,unit\n1-May-26,90,kg\n\"May 3, 26\",89.5,kg\n");
        assert!(diags.is_empty(), "{diags:?}");
        assert_eq!(got.unwrap(), ["2026-05-01", "2026-05-03"]);
        // No century puts `1-May-99` within the program: not a date (the row's warning).
        assert!(parse_when("1-May-99", &opts).is_none());
        assert!(parse_when("26-04-03", &CsvOptions::default()).is_none());
    }

    #[test]
    fn iso_dates_read_directly_agree_with_chrono() {
        // The direct path must give exactly what chrono gives for `%Y-%m-%d` (chrono 0.4 is
        // the reference here), including refusing days that do not exist.
        for s in [
            "2026-04-01",
            "2024-02-29",
            "2026-02-29",
            "2026-13-01",
            "2026-00-10",
            "2026-04-31",
            "0000-01-01",
            "9999-12-31",
            "2026-4-01",
            "2026-04-1",
            "26-04-2001",
            "2026/04/01",
            "+2026-04-01",
            "2026-04-01x",
            "２０２６-04-01",
            "",
        ] {
            assert_eq!(
                parse_date(s, "%Y-%m-%d").ok(),
                NaiveDate::parse_from_str(s, "%Y-%m-%d").ok(),
                "{s:?}"
            );
        }
        assert_eq!(
            parse_date("01/04/2026", "%d/%m/%Y").unwrap(),
            NaiveDate::from_ymd_opt(2026, 4, 1).unwrap()
        );
    }

    #[test]
    fn budgets_refuse_wide_headers_and_long_files_and_drop_huge_fields() {
        let opts = CsvOptions::default();
        let wide = format!("date,weight,unit{}\n", ",x".repeat(MAX_CSV_COLUMNS));
        let (t, d) = read(&wide, &opts);
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert!(
            d[0].message.contains("more than the limit of 256"),
            "{}",
            d[0]
        );

        let mut long = String::from("date,weight,unit\n");
        for _ in 0..=MAX_CSV_ROWS {
            long.push_str("2026-04-01,72,kg\n");
        }
        let (t, d) = read(&long, &opts);
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].line, Some(MAX_CSV_ROWS as u64 + 2));
        assert!(d[0].message.contains("more than 50000 rows"), "{}", d[0]);
        // Line, column, expected and found, as every input message gives them (a 50 MB
        // weights.csv gave no column and no "found").
        assert_eq!(d[0].column, Some(1), "{}", d[0]);
        assert_eq!(
            d[0].found.as_deref(),
            Some("row 50001 starting here, and the file was not read past it"),
            "{}",
            d[0]
        );
        // At the limit the file is read.
        let at_limit = &long[..long.len() - "2026-04-01,72,kg\n".len()];
        let (t, d) = read(at_limit, &opts);
        assert!(d.is_empty());
        assert_eq!(t.unwrap().rows.len(), MAX_CSV_ROWS);

        let huge = format!(
            "date,weight,unit,source\n2026-04-01,72,kg,{}\n2026-04-02,71,kg,scale\n",
            "n".repeat(MAX_CSV_FIELD_BYTES + 1)
        );
        let (t, d) = read(&huge, &opts);
        assert_eq!(t.unwrap().rows.len(), 1);
        assert_eq!(d.len(), 1);
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(4)));
        assert!(d[0].found.as_ref().unwrap().len() < 60, "{}", d[0]);
    }

    #[test]
    fn a_header_field_over_the_field_limit_refuses_the_file_and_is_not_quoted_whole() {
        // A file with no line end and no delimiter is one header field: it was taken as a
        // column name, and "missing required columns" quoted all of it (60 MB in the log, the
        // data-quality list and the partial result).
        let opts = CsvOptions::default();
        let one_field = "a".repeat(MAX_CSV_FIELD_BYTES + 1);
        let (t, d) = read(&one_field, &opts);
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(1)));
        assert_eq!(
            d[0].message,
            "a header field of 4097 bytes is longer than the limit of 4096; the file cannot be used"
        );
        assert_eq!(
            d[0].found.as_deref(),
            Some(format!("`{}…`", "a".repeat(40)).as_str())
        );
        // Many long column names, none of ours: the list of what was found is cut.
        let names: Vec<String> = (0..200)
            .map(|i| format!("column number {i:03} of an export"))
            .collect();
        let (t, d) = read(&format!("{}\n", names.join(",")), &opts);
        assert!(t.is_none());
        let found = d[0].found.as_deref().unwrap();
        // `a,b,…` of 200 names of 30 characters and what was read of them (`: no column read
        // as one of ours`): 6,232 characters, of which 1,000 are kept.
        assert!(
            found.starts_with("`column number 000 of an export,column number 001 of"),
            "{found}"
        );
        assert!(found.ends_with("… (5,232 more characters)"), "{found}");
        assert_eq!(
            found.chars().count(),
            1000 + "… (5,232 more characters)".chars().count()
        );
    }

    #[test]
    fn a_field_over_the_read_limit_refuses_the_file_at_its_line_and_column_before_reading() {
        // A quote never closed on the third line, after a note with a quoted line end and a
        // CRLF line: every line after it is one field of over 1 MiB. It was read whole by the
        // CSV reader (a 60 MB field made `check` peak at 320 MB) and cost only its row.
        let opts = CsvOptions::default();
        let mut text = String::from(
            "date,weight,unit,source\r\n2026-04-01,72,kg,\"home\nscale\"\n2026-04-02,71,kg,\"ok",
        );
        let row = "\n2026-04-03,71,kg,scale";
        while text.len() <= MAX_CSV_FIELD_READ_BYTES + 100 {
            text.push_str(row);
        }
        let (t, d) = read(&text, &opts);
        assert!(t.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert_eq!((d[0].line, d[0].column), (Some(4), Some(4)), "{}", d[0]);
        let field = text.len() - text.find(",\"ok").unwrap() - 1;
        assert_eq!(
            d[0].message,
            format!(
                "a field of {field} bytes starts here, longer than the limit of 1 MiB for one \
                 field; the file cannot be used"
            )
        );
        // Both limits, so the two numbers do not contradict each other (attack22: "longer than
        // the limit of 1 MiB" beside "expected: fields of at most 4096 bytes").
        assert_eq!(
            d[0].expected.as_deref(),
            Some(
                "fields of at most 4096 bytes (a date, a number, a unit or a short note; a longer \
                 field costs its row, one over 1 MiB the file)"
            )
        );
        assert_eq!(
            d[0].found.as_deref(),
            Some("`\"ok\\n2026-04-03,71,kg,scale\\n2026-04-03,71…`")
        );
        assert!(
            d[0].hint.as_deref().unwrap().contains("never closed"),
            "{}",
            d[0]
        );

        // A file without line ends or delimiters: one field from the first byte.
        let (t, d) = read(&"x".repeat(MAX_CSV_FIELD_READ_BYTES + 1), &opts);
        assert!(t.is_none());
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(1)));
        assert!(
            d[0].hint.as_deref().unwrap().contains("line ends"),
            "{}",
            d[0]
        );

        // A closed quote with doubled quotes and delimiters inside is one field; at the limit
        // it is read (and its row dropped, as any field over 4 KiB), one byte over it is not.
        let body = |n: usize| {
            // `n` bytes as written, its two quotes included.
            let inner = format!("a\"\",b;{}", "c".repeat(n - 8));
            format!(
                "date,weight,unit,source\n2026-04-01,72,kg,\"{inner}\"\n2026-04-02,71,kg,scale\n"
            )
        };
        let (t, d) = read(&body(MAX_CSV_FIELD_READ_BYTES), &opts);
        assert_eq!(t.unwrap().rows.len(), 1);
        assert!(d[0].message.contains("the row is dropped"), "{}", d[0]);
        let (t, d) = read(&body(MAX_CSV_FIELD_READ_BYTES + 1), &opts);
        assert!(t.is_none());
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(4)), "{}", d[0]);

        // Semicolons: the column counts them, not the commas in the field before.
        let text = format!(
            "date;kcal;note\n2026-04-01;1800;\"1,5\";{}\n",
            "y".repeat(MAX_CSV_FIELD_READ_BYTES + 1)
        );
        let opts_semi = CsvOptions {
            delimiter: Some(b';'),
            ..CsvOptions::default()
        };
        let (_, d) = read(&text, &opts_semi);
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(4)), "{}", d[0]);
    }

    #[test]
    fn zero_bytes_ending_a_file_are_named_as_what_a_crash_leaves_and_not_read() {
        // A file saved or copied when the power went: its length kept, its last blocks zeros.
        // The zeros were a row of one field ("a field of 5000 bytes … check for a quote that
        // is never closed"), and nothing said rows might be missing.
        let opts = CsvOptions::default();
        let text = format!(
            "date,weight,unit\r\n2026-04-01,72,kg\r\n2026-04-02,71.9,kg\r\n{}",
            "\0".repeat(5000)
        );
        let (t, d) = read(&text, &opts);
        assert_eq!(t.unwrap().rows.len(), 2);
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Warning);
        assert_eq!(
            d[0].message,
            "the file ends with 5000 zero bytes, which are not read: what a save or a copy \
             stopped by a crash or a power cut leaves; rows after line 3 may be missing"
        );
        assert_eq!((d[0].line, d[0].column), (Some(4), None));
        // Cut inside a row: the row is read as what it is (here one field short).
        let (t, d) = read(
            "date,weight,unit\n2026-04-01,72,kg\n2026-04-02,71\0\0\0",
            &opts,
        );
        assert_eq!(t.unwrap().rows.len(), 1);
        assert_eq!(d[0].line, Some(3), "{d:?}");
        assert!(d[0].message.contains("rows after line 2"), "{}", d[0]);
        // Over the field limit too, the zeros are named, not read as one huge field.
        let text = format!(
            "date,weight,unit\n2026-04-01,72,kg\n{}",
            "\0".repeat(MAX_CSV_FIELD_READ_BYTES + 1)
        );
        let (t, d) = read(&text, &opts);
        assert_eq!(t.unwrap().rows.len(), 1);
        assert_eq!(d.len(), 1, "{d:?}");
    }

    #[test]
    fn the_reader_does_not_keep_a_large_file_for_the_thread() {
        let mut long = String::from("date,weight,unit\n");
        while long.len() <= 2 * KEPT_READER_BYTES {
            long.push_str("2026-04-01,72,kg\n");
        }
        let rows = with_reader(b',', &long, |r| r.records().count());
        assert!(rows > 100_000);
        let kept = READER.with(|r| {
            r.borrow()
                .as_ref()
                .map_or(0, |(_, r)| r.get_ref().get_ref().capacity())
        });
        assert!(kept <= KEPT_READER_BYTES, "{kept}");
    }

    #[test]
    fn a_reused_reader_reads_each_file_from_its_start() {
        // The per-thread reader is reused: a long file, then a shorter one, then another
        // delimiter must each read as if by a new reader.
        let long = "date,weight,unit\n2026-04-01,72,kg\n2026-04-02,71.9,kg\n2026-04-03,71.8,kg\n";
        let (t, d) = read(long, &CsvOptions::default());
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(t.unwrap().rows.len(), 3);
        let (t, d) = read(
            "date,weight,unit\r\n\r\n2026-05-01,\"70\",kg\r\n",
            &CsvOptions::default(),
        );
        assert!(d.is_empty(), "{d:?}");
        let t = t.unwrap();
        assert_eq!(t.rows.len(), 1);
        assert_eq!(t.rows[0].line, 3);
        assert_eq!(t.get(&t.rows[0], "date"), Some("2026-05-01"));
        assert_eq!(t.get(&t.rows[0], "weight"), Some("70"));
        let semi = CsvOptions {
            delimiter: Some(b';'),
            ..CsvOptions::default()
        };
        let (t, d) = read("date;weight;unit\n2026-06-01;69,5;kg\n", &semi);
        assert!(d.is_empty(), "{d:?}");
        let t = t.unwrap();
        assert_eq!(t.get(&t.rows[0], "weight"), Some("69,5"));
        let (t, _) = read(long, &CsvOptions::default());
        assert_eq!(t.unwrap().rows[2].line, 4);
    }
}

//! Reading one CSV file into rows addressed by column name, with every problem of the file's
//! shape reported: missing or duplicate columns, extra columns, rows with the wrong number of
//! fields. Cell values are read by the helpers here so every message has the same form.

use super::quantity::{NumberError, parse_decimal};
use crate::diag::Diagnostic;
use crate::limits::{MAX_CSV_COLUMNS, MAX_CSV_FIELD_BYTES, MAX_CSV_ROWS};
use chrono::NaiveDate;
use std::collections::BTreeMap;

/// Where diagnostics go: the participant and the file (relative to the program folder).
#[derive(Debug, Clone)]
pub struct FileCtx {
    /// Participant id.
    pub participant: String,
    /// File path relative to the program folder.
    pub file: String,
}

impl FileCtx {
    /// A new context.
    pub fn new(participant: &str, file: impl Into<String>) -> Self {
        FileCtx {
            participant: participant.to_string(),
            file: file.into(),
        }
    }
    /// An error about this file.
    pub fn error(&self, message: impl Into<String>) -> Diagnostic {
        Diagnostic::error(&self.file, message).participant(&self.participant)
    }
    /// A warning about this file.
    pub fn warning(&self, message: impl Into<String>) -> Diagnostic {
        Diagnostic::warning(&self.file, message).participant(&self.participant)
    }
}

/// How CSV files are read (from `program.yaml`'s `input:`).
#[derive(Debug, Clone)]
pub struct CsvOptions {
    /// Field delimiter.
    pub delimiter: u8,
    /// chrono date format.
    pub date_format: String,
}

impl Default for CsvOptions {
    fn default() -> Self {
        CsvOptions {
            delimiter: b',',
            date_format: "%Y-%m-%d".into(),
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
}

/// One data row.
#[derive(Debug, Clone)]
pub struct Row {
    /// 1-based line in the file.
    pub line: u64,
    /// Index of its first field in [`Table::bounds`].
    first: usize,
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
    text: String,
    bounds: Vec<(usize, usize)>,
}

impl Table {
    /// 1-based field number of `col` (for diagnostics), when the file has it.
    pub fn column(&self, col: &str) -> Option<u64> {
        self.columns.get(col).map(|&i| i as u64 + 1)
    }

    /// The trimmed text of `col` in `row`; `None` when the column is absent or the cell empty.
    pub fn get<'t>(&'t self, row: &Row, col: &str) -> Option<&'t str> {
        let i = *self.columns.get(col)?;
        let (a, b) = *self.bounds.get(row.first + i)?;
        let s = self.text[a..b].trim();
        (!s.is_empty()).then_some(s)
    }

    fn empty() -> Table {
        Table {
            columns: BTreeMap::new(),
            rows: Vec::new(),
            text: String::new(),
            bounds: Vec::new(),
        }
    }
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
    with_reader(opts.delimiter, text, |reader| {
        read_records(reader, text, spec, opts, ctx, diags)
    })
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
    READER.with(|r| *r.borrow_mut() = Some((delimiter, reader)));
    out
}

fn read_records(
    reader: &mut BufferReader,
    text: &str,
    spec: &FileSpec,
    opts: &CsvOptions,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Option<Table> {
    // One record buffer for the whole file (csv's record iterator clones every record).
    let mut rec = csv::StringRecord::new();
    let header = loop {
        match reader.read_record(&mut rec) {
            Ok(false) => return Some(Table::empty()),
            Err(e) => {
                diags.push(
                    ctx.error(format!("cannot read the header row ({e})"))
                        .at(1, None),
                );
                return None;
            }
            Ok(true) if rec.iter().all(|f| f.trim().is_empty()) => continue,
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
            line += bytes[from..b].iter().filter(|&&c| c == b'\n').count() as u64;
            counted.set((b, line));
            line
        })
    };
    let header_line = line_of(header.position());
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
    let names: Vec<String> = header.iter().map(|h| h.trim().to_lowercase()).collect();
    let mut columns = BTreeMap::new();
    let mut usable = true;
    let mut extra = Vec::new();
    for (i, name) in names.iter().enumerate() {
        let known = spec
            .required
            .iter()
            .chain(spec.optional)
            .find(|c| **c == name.as_str());
        match known {
            Some(c) => {
                if columns.insert(*c, i).is_some() {
                    diags.push(
                        ctx.error(format!("column `{c}` appears twice in the header"))
                            .at(header_line, Some(i as u64 + 1))
                            .field(*c)
                            .hint("keep one column of each name"),
                    );
                    usable = false;
                }
            }
            None => extra.push(
                ctx.warning(format!("extra column `{name}` is ignored"))
                    .at(header_line, Some(i as u64 + 1))
                    .field(name.clone())
                    .expected(format!("columns {}", column_list(spec)))
                    .hint("remove the column or check its spelling"),
            ),
        }
    }
    let missing: Vec<&str> = spec
        .required
        .iter()
        .filter(|c| !columns.contains_key(**c))
        .copied()
        .collect();
    if !missing.is_empty() {
        let looks_like_data = names.first().is_some_and(|f| {
            NaiveDate::parse_from_str(f, &opts.date_format).is_ok() || parse_decimal(f).is_ok()
        });
        let hint = if looks_like_data {
            format!(
                "the first row looks like data; add a header row naming the columns, e.g. `{}`",
                spec.required.join(&(opts.delimiter as char).to_string())
            )
        } else if names.len() == 1 && opts.delimiter != b';' && names[0].contains(';') {
            "the file seems to use `;` between fields; set `input: { delimiter: ';' }` in program.yaml"
                .to_string()
        } else {
            "name the columns in the first row; columns may come in any order".to_string()
        };
        let s = if missing.len() == 1 { "" } else { "s" };
        diags.push(
            ctx.error(format!(
                "missing required column{s} {}; the file cannot be used",
                missing
                    .iter()
                    .map(|m| format!("`{m}`"))
                    .collect::<Vec<_>>()
                    .join(", ")
            ))
            .at(header_line, None)
            .expected(format!("columns {}", column_list(spec)))
            .found(format!(
                "`{}`",
                names.join(&(opts.delimiter as char).to_string())
            ))
            .hint(hint),
        );
        usable = false;
    }
    if !usable {
        return None;
    }
    // Extra columns are only worth a word when the header itself is right.
    diags.extend(extra);
    let mut table = Table {
        columns,
        rows: Vec::new(),
        text: String::with_capacity(text.len()),
        bounds: Vec::new(),
    };
    let mut records = 0usize;
    loop {
        match reader.read_record(&mut rec) {
            Ok(true) => {
                records += 1;
                if records > MAX_CSV_ROWS {
                    diags.push(
                        ctx.error(format!(
                            "the file has more than {MAX_CSV_ROWS} rows, the limit for one file; it was not read further and cannot be used"
                        ))
                        .at(line_of(rec.position()), None)
                        .expected(format!("at most {MAX_CSV_ROWS} rows"))
                        .hint("check it is the right file; split a very long history into the reporting years"),
                    );
                    return None;
                }
            }
            Ok(false) => break,
            Err(e) => {
                let line = e.position().map(|p| line_of(Some(p)));
                let mut d = ctx.warning(format!("unreadable row is dropped ({e})"));
                if let Some(l) = line {
                    d = d.at(l, None);
                }
                diags.push(d);
                continue;
            }
        }
        let line = line_of(rec.position());
        if rec.iter().all(|f| f.trim().is_empty()) {
            continue;
        }
        if let Some(i) = rec.iter().position(|f| f.len() > MAX_CSV_FIELD_BYTES) {
            diags.push(
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
        if rec.len() != names.len() {
            let mut d = ctx
                .warning(format!(
                    "row has {} fields but the header has {}; the row is dropped",
                    rec.len(),
                    names.len()
                ))
                .at(line, None)
                .expected(format!("{} fields", names.len()))
                .found(format!(
                    "{} fields: `{}`",
                    rec.len(),
                    shorten(
                        &rec.iter()
                            .take(MAX_CSV_COLUMNS + 1)
                            .map(str::trim)
                            .collect::<Vec<_>>()
                            .join(&(opts.delimiter as char).to_string()),
                        200
                    )
                ));
            let split_decimal = rec.len() == names.len() + 1
                && opts.delimiter == b','
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
            d = d.hint(if split_decimal {
                "a decimal comma (`72,5`) splits a number into two fields; write `72.5`".to_string()
            } else {
                "every row needs one value per header column (leave a value empty, but keep its delimiter); quote text containing the delimiter".to_string()
            });
            diags.push(d);
            continue;
        }
        let first = table.bounds.len();
        for f in &rec {
            let start = table.text.len();
            table.text.push_str(f);
            table.bounds.push((start, table.text.len()));
        }
        table.rows.push(Row { line, first });
    }
    Some(table)
}

/// The first `max` characters of `s`, with `…` when cut.
fn shorten(s: &str, max: usize) -> String {
    match s.char_indices().nth(max) {
        Some((i, _)) => format!("{}…", &s[..i]),
        None => s.to_string(),
    }
}

fn column_list(spec: &FileSpec) -> String {
    let mut s = spec.required.join(", ");
    if !spec.optional.is_empty() {
        s.push_str(&format!(" (optional: {})", spec.optional.join(", ")));
    }
    s
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
    /// A warning located at `col` of this row.
    pub fn warn(&self, col: &str, message: impl Into<String>) -> Diagnostic {
        self.ctx
            .warning(message)
            .at(self.row.line, self.table.column(col))
            .field(col)
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
                diags.push(
                    self.warn(col, format!("`{col}` is empty; the row is dropped"))
                        .hint("fill in the value or remove the row"),
                );
                None
            }
        }
    }

    /// A required date.
    pub fn date(&self, col: &str, diags: &mut Vec<Diagnostic>) -> Option<NaiveDate> {
        let Some(s) = self.text(col) else {
            // Pushes the "is empty" warning.
            return self.required_text(col, diags).and(None);
        };
        match parse_date(s, &self.opts.date_format) {
            Ok(d) => Some(d),
            Err(_) => {
                let example = NaiveDate::from_ymd_opt(2026, 4, 1)
                    .expect("valid")
                    .format(&self.opts.date_format)
                    .to_string();
                let other = ["%Y-%m-%d", "%d/%m/%Y", "%m/%d/%Y", "%d.%m.%Y", "%Y/%m/%d"]
                    .into_iter()
                    .find(|f| {
                        *f != self.opts.date_format && NaiveDate::parse_from_str(s, f).is_ok()
                    });
                let hint = match other {
                    Some(f) => format!(
                        "the value reads as a date in the format `{f}`; write dates like `{example}` or set `input.date_format` in program.yaml"
                    ),
                    None => format!("write dates like `{example}` and check the day exists"),
                };
                diags.push(
                    self.warn(col, "unreadable date; the row is dropped")
                        .expected(format!(
                            "a date like `{example}` (format `{}`)",
                            self.opts.date_format
                        ))
                        .found(format!("`{s}`"))
                        .hint(hint),
                );
                None
            }
        }
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

    fn parse_number(
        &self,
        col: &str,
        s: &str,
        consequence: &str,
        diags: &mut Vec<Diagnostic>,
    ) -> Option<f64> {
        match parse_decimal(s) {
            Ok(v) => Some(v),
            Err(e) => {
                let what = match e {
                    NumberError::DecimalComma => "decimal comma",
                    _ => "not a number",
                };
                diags.push(
                    self.warn(col, format!("{what} in `{col}`; {consequence}"))
                        .expected("a number with a decimal point, e.g. `72.5`")
                        .found(format!("`{s}`"))
                        .hint(e.hint()),
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
    };

    fn read(text: &str, opts: &CsvOptions) -> (Option<Table>, Vec<Diagnostic>) {
        let ctx = FileCtx::new("P1", "participants/P1/weights.csv");
        let mut d = Vec::new();
        let t = read_table(text, &SPEC, opts, &ctx, &mut d);
        (t, d)
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
    fn missing_column_is_an_error_naming_it() {
        let (t, d) = read("date,weight\n2026-04-01,72\n", &CsvOptions::default());
        assert!(t.is_none());
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].severity, crate::diag::Severity::Error);
        assert!(d[0].message.contains("`unit`"), "{}", d[0]);
        assert_eq!(d[0].line, Some(1));
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
        let (t, d) = read(
            "date,weight,unit,mood\n2026-04-01,72,kg,ok\n",
            &CsvOptions::default(),
        );
        assert!(t.is_some());
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].severity, crate::diag::Severity::Warning);
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(4)));
        let (t, d) = read("date,weight,unit,weight\n", &CsvOptions::default());
        assert!(t.is_none());
        assert!(d[0].message.contains("appears twice"));
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
        assert!(d[0].hint.as_deref().unwrap().contains("decimal comma"));
        assert_eq!(d[1].line, Some(3));
        assert!(!d[1].hint.as_deref().unwrap().contains("decimal comma"));
    }

    #[test]
    fn empty_and_header_only_files_have_no_rows() {
        for text in ["", "\n", "date,weight,unit\n", "date,weight,unit"] {
            let (t, d) = read(text, &CsvOptions::default());
            assert!(d.is_empty(), "{text:?}");
            assert!(t.unwrap().rows.is_empty());
        }
    }

    #[test]
    fn semicolon_files_are_recognised() {
        let (t, d) = read(
            "date;weight;unit\n2026-04-01;72,5;kg\n",
            &CsvOptions::default(),
        );
        assert!(t.is_none());
        assert!(
            d[0].hint.as_deref().unwrap().contains("delimiter: ';'"),
            "{}",
            d[0]
        );
        let opts = CsvOptions {
            delimiter: b';',
            ..Default::default()
        };
        let (t, d) = read("date;weight;unit\n2026-04-01;72,5;kg\n", &opts);
        assert!(d.is_empty());
        let t = t.unwrap();
        let ctx = FileCtx::new("P1", "w.csv");
        let cells = Cells {
            table: &t,
            row: &t.rows[0],
            ctx: &ctx,
            opts: &opts,
        };
        let mut d = Vec::new();
        assert_eq!(cells.number("weight", &mut d), None);
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(2)));
        assert!(d[0].message.contains("decimal comma"), "{}", d[0]);
        assert!(d[0].hint.as_deref().unwrap().contains("72.5"));
    }

    #[test]
    fn bad_dates_suggest_the_format() {
        let opts = CsvOptions::default();
        let (t, _) = read(
            "date,weight,unit\n01/04/2026,72,kg\n2026-02-30,72,kg\n",
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
            Some("a date like `2026-04-01` (format `%Y-%m-%d`)")
        );
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
            delimiter: b';',
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

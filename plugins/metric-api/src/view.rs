//! Typed reading and writing of module outputs.
//!
//! A module's output travels as a [`ModuleOutput`]: named scalars, texts, series, tables and
//! flags. Code that consumes it (reports, other modules) should not look values up by string
//! key: a renamed output or column would silently read as missing. Instead each built-in module
//! crate exports a *view* — a typed struct of its outputs implementing [`ModuleView`] — read
//! through an [`OutputReader`] and written through an [`OutputWriter`], so the names live in one
//! place and a mismatch is an error that names the module, the output and the column.
//!
//! Closed sets of codes (statuses, verdicts, categories, flag codes) are enums declared with
//! [`code_enum!`]; on the wire they stay the snake_case strings of the protocol.

use crate::{Cell, Column, Flag, FlagSeverity, ModuleOutput, ModuleSpec, Scalar, Series};
use chrono::NaiveDate;
use std::cell::RefCell;
use std::collections::BTreeSet;
use std::fmt;

/// Why a module output could not be read as its view.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ViewError {
    /// Module id.
    pub module: String,
    /// Output name.
    pub output: String,
    /// Column of a table, when the problem is in one.
    pub column: Option<String>,
    /// Row of a table (1-based), when the problem is in one.
    pub row: Option<usize>,
    /// What was wrong (`is missing`, `expected a date …, found …`).
    pub problem: String,
}

impl fmt::Display for ViewError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "module `{}`, output `{}`", self.module, self.output)?;
        if let Some(c) = &self.column {
            write!(f, ", column `{c}`")?;
        }
        if let Some(r) = self.row {
            write!(f, ", row {r}")?;
        }
        write!(f, ": {}", self.problem)
    }
}

impl std::error::Error for ViewError {}

/// A code that is not one of an enum's codes.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct UnknownCode {
    /// The code found.
    pub found: String,
    /// The codes allowed.
    pub expected: Vec<&'static str>,
}

impl fmt::Display for UnknownCode {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "expected one of {}, found `{}`",
            self.expected.join(", "),
            self.found
        )
    }
}

impl std::error::Error for UnknownCode {}

/// A closed set of codes written as snake_case text in module outputs (see [`code_enum!`]).
pub trait Code: Copy + Eq + fmt::Debug + 'static {
    /// Every value, in declaration order.
    fn all() -> &'static [Self];
    /// The code on the wire.
    fn code(self) -> &'static str;
    /// Short human label.
    fn label(self) -> &'static str;
    /// The value with code `s`.
    fn from_code(s: &str) -> Result<Self, UnknownCode> {
        Self::all()
            .iter()
            .copied()
            .find(|c| c.code() == s)
            .ok_or_else(|| UnknownCode {
                found: s.to_string(),
                expected: Self::all().iter().map(|c| c.code()).collect(),
            })
    }
}

impl Code for crate::LabTest {
    fn all() -> &'static [Self] {
        use crate::LabTest::*;
        &[FastingGlucose, Hba1c, Waist, SystolicBp, DiastolicBp, Egfr]
    }
    fn code(self) -> &'static str {
        use crate::LabTest::*;
        match self {
            FastingGlucose => "fasting_glucose",
            Hba1c => "hba1c",
            Waist => "waist",
            SystolicBp => "systolic_bp",
            DiastolicBp => "diastolic_bp",
            Egfr => "egfr",
        }
    }
    fn label(self) -> &'static str {
        use crate::LabTest::*;
        match self {
            FastingGlucose => "Fasting glucose",
            Hba1c => "HbA1c",
            Waist => "Waist",
            SystolicBp => "Blood pressure (systolic)",
            DiastolicBp => "Blood pressure (diastolic)",
            Egfr => "eGFR (kidney function)",
        }
    }
}

impl Code for crate::Censor {
    fn all() -> &'static [Self] {
        use crate::Censor::*;
        &[Above, AtLeast, Below, AtMost]
    }
    fn code(self) -> &'static str {
        self.symbol()
    }
    fn label(self) -> &'static str {
        use crate::Censor::*;
        match self {
            Above => "above",
            AtLeast => "at or above",
            Below => "below",
            AtMost => "at or below",
        }
    }
}

/// Declares an enum of codes with its wire codes and labels, implementing [`Code`],
/// [`std::str::FromStr`] and [`std::fmt::Display`] (which prints the code).
///
/// ```
/// cohortpress_metric_api::code_enum! {
///     /// Direction of a change.
///     pub enum Direction {
///         /// Going down.
///         Down = "down" => "Going down",
///         /// Going up.
///         Up = "up" => "Going up",
///     }
/// }
/// assert_eq!("up".parse::<Direction>().unwrap(), Direction::Up);
/// assert_eq!(Direction::Down.to_string(), "down");
/// ```
#[macro_export]
macro_rules! code_enum {
    ($(#[$m:meta])* $vis:vis enum $name:ident {
        $($(#[$vm:meta])* $var:ident = $code:literal => $label:literal),+ $(,)?
    }) => {
        $(#[$m])*
        #[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord)]
        $vis enum $name {
            $($(#[$vm])* $var),+
        }
        impl $name {
            /// The code on the wire.
            pub fn as_str(self) -> &'static str {
                match self { $($name::$var => $code),+ }
            }
            /// Short human label.
            pub fn label(self) -> &'static str {
                match self { $($name::$var => $label),+ }
            }
        }
        impl $crate::view::Code for $name {
            fn all() -> &'static [Self] {
                &[$($name::$var),+]
            }
            fn code(self) -> &'static str {
                self.as_str()
            }
            fn label(self) -> &'static str {
                $name::label(self)
            }
        }
        impl ::std::str::FromStr for $name {
            type Err = $crate::view::UnknownCode;
            fn from_str(s: &str) -> Result<Self, Self::Err> {
                <$name as $crate::view::Code>::from_code(s)
            }
        }
        impl ::std::fmt::Display for $name {
            fn fmt(&self, f: &mut ::std::fmt::Formatter<'_>) -> ::std::fmt::Result {
                f.write_str(self.as_str())
            }
        }
    };
}

/// A scalar's value with its interval (each part missing when it could not be computed).
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct Interval {
    /// The value.
    pub value: Option<f64>,
    /// Lower bound.
    pub lower: Option<f64>,
    /// Upper bound.
    pub upper: Option<f64>,
}

impl Interval {
    /// A value without bounds.
    pub fn value(value: Option<f64>) -> Self {
        Interval {
            value,
            lower: None,
            upper: None,
        }
    }
}

/// A text output: its value and the label of that value.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct Labelled {
    /// The value (a stable code, or a date, or empty).
    pub value: String,
    /// Short human label of the value.
    pub label: String,
}

/// A flag with a typed code.
#[derive(Debug, Clone, PartialEq)]
pub struct TypedFlag<F> {
    /// The code.
    pub code: F,
    /// Severity.
    pub severity: FlagSeverity,
    /// Plain-words message.
    pub message: String,
}

/// One row type of a table output: its columns and how a row is read and written.
pub trait TableRow: Sized {
    /// The columns: name, unit (empty when unitless) and label.
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)];
    /// Reads one row.
    fn read(r: &RowReader<'_>) -> Result<Self, ViewError>;
    /// Writes one row: one cell per column of [`TableRow::COLUMNS`], in order.
    fn write(&self) -> Vec<Cell>;
    /// The columns as [`Column`]s.
    fn columns() -> Vec<Column> {
        Self::COLUMNS
            .iter()
            .map(|(n, u, l)| Column::new(n, u, l))
            .collect()
    }
}

/// The typed view of one module's output.
pub trait ModuleView: Sized {
    /// The module id.
    const MODULE: &'static str;
    /// The module's spec (its declared outputs, with units and descriptions).
    fn spec() -> ModuleSpec;
    /// Reads the view.
    fn read(r: &OutputReader<'_>) -> Result<Self, ViewError>;
    /// Writes the view.
    fn write(&self, w: &mut OutputWriter);
    /// Reads the view from a module output.
    fn from_output(out: &ModuleOutput) -> Result<Self, ViewError> {
        Self::read(&OutputReader::new(Self::MODULE, out))
    }
    /// Writes the view as a module output (units and labels from the spec).
    fn to_output(&self) -> ModuleOutput {
        let mut w = OutputWriter::new(Self::spec());
        self.write(&mut w);
        w.finish()
    }
}

/// Reads the outputs of one module by name and type, and records which names were read.
pub struct OutputReader<'a> {
    module: &'a str,
    out: &'a ModuleOutput,
    read: RefCell<BTreeSet<String>>,
}

impl<'a> OutputReader<'a> {
    /// A reader of `out`, the output of module `module`.
    pub fn new(module: &'a str, out: &'a ModuleOutput) -> Self {
        OutputReader {
            module,
            out,
            read: RefCell::new(BTreeSet::new()),
        }
    }

    /// The names asked for so far (flags count by their codes).
    pub fn names_read(&self) -> BTreeSet<String> {
        self.read.borrow().clone()
    }

    fn mark(&self, name: &str) {
        self.read.borrow_mut().insert(name.to_string());
    }

    fn error(&self, output: &str, problem: impl Into<String>) -> ViewError {
        ViewError {
            module: self.module.to_string(),
            output: output.to_string(),
            column: None,
            row: None,
            problem: problem.into(),
        }
    }

    fn missing(&self, output: &str, kind: &str) -> ViewError {
        self.error(output, format!("the {kind} is missing"))
    }

    /// Whether an output called `name` is present (of any kind; flags by code).
    pub fn has(&self, name: &str) -> bool {
        self.out.scalars.iter().any(|s| s.name == name)
            || self.out.texts.iter().any(|s| s.name == name)
            || self.out.series.iter().any(|s| s.name == name)
            || self.out.tables.iter().any(|s| s.name == name)
    }

    /// `read()` when output `name` is present, `None` when it is absent.
    pub fn optional<T>(
        &self,
        name: &str,
        read: impl FnOnce() -> Result<T, ViewError>,
    ) -> Result<Option<T>, ViewError> {
        self.mark(name);
        if self.has(name) {
            read().map(Some)
        } else {
            Ok(None)
        }
    }

    fn scalar_entry(&self, name: &str) -> Result<&'a Scalar, ViewError> {
        self.mark(name);
        self.out
            .scalars
            .iter()
            .find(|s| s.name == name)
            .ok_or_else(|| self.missing(name, "scalar"))
    }

    /// The value of scalar `name` (`None` when it could not be computed).
    pub fn scalar(&self, name: &str) -> Result<Option<f64>, ViewError> {
        Ok(self.scalar_entry(name)?.value)
    }

    /// Scalar `name` with its interval.
    pub fn interval(&self, name: &str) -> Result<Interval, ViewError> {
        let s = self.scalar_entry(name)?;
        Ok(Interval {
            value: s.value,
            lower: s.lower,
            upper: s.upper,
        })
    }

    /// Text `name` with its label.
    pub fn text(&self, name: &str) -> Result<Labelled, ViewError> {
        self.mark(name);
        let t = self
            .out
            .texts
            .iter()
            .find(|t| t.name == name)
            .ok_or_else(|| self.missing(name, "text"))?;
        Ok(Labelled {
            value: t.value.clone(),
            label: t.label.clone(),
        })
    }

    /// Text `name` as a code of `T`.
    pub fn code<T: Code>(&self, name: &str) -> Result<T, ViewError> {
        let t = self.text(name)?;
        T::from_code(&t.value).map_err(|e| self.error(name, e.to_string()))
    }

    /// Text `name` as a date (`YYYY-MM-DD`; empty text is `None`).
    pub fn date(&self, name: &str) -> Result<Option<NaiveDate>, ViewError> {
        let t = self.text(name)?;
        parse_date(&t.value).map_err(|p| self.error(name, p))
    }

    /// Series `name`.
    pub fn series(&self, name: &str) -> Result<Series, ViewError> {
        self.mark(name);
        self.out
            .series
            .iter()
            .find(|s| s.name == name)
            .cloned()
            .ok_or_else(|| self.missing(name, "series"))
    }

    /// The rows of table `name`, each read as an `R`.
    pub fn table<R: TableRow>(&self, name: &str) -> Result<Vec<R>, ViewError> {
        self.mark(name);
        let t = self
            .out
            .tables
            .iter()
            .find(|t| t.name == name)
            .ok_or_else(|| self.missing(name, "table"))?;
        let mut idx = Vec::with_capacity(R::COLUMNS.len());
        for (c, _, _) in R::COLUMNS {
            match t.columns.iter().position(|k| k.name == *c) {
                Some(i) => idx.push(i),
                None => {
                    return Err(ViewError {
                        column: Some(c.to_string()),
                        ..self.error(name, "the column is missing")
                    });
                }
            }
        }
        t.rows
            .iter()
            .enumerate()
            .map(|(i, row)| {
                R::read(&RowReader {
                    module: self.module,
                    table: name,
                    columns: R::COLUMNS,
                    idx: &idx,
                    row,
                    number: i + 1,
                })
            })
            .collect()
    }

    /// The flags, with codes of `F` (a code `F` does not know is an error). Every code of `F`
    /// counts as read.
    pub fn flags<F: Code>(&self) -> Result<Vec<TypedFlag<F>>, ViewError> {
        for c in F::all() {
            self.mark(c.code());
        }
        self.out
            .flags
            .iter()
            .map(|f| {
                Ok(TypedFlag {
                    code: F::from_code(&f.code)
                        .map_err(|e| self.error(&f.code, format!("unknown flag: {e}")))?,
                    severity: f.severity,
                    message: f.message.clone(),
                })
            })
            .collect()
    }
}

fn parse_date(s: &str) -> Result<Option<NaiveDate>, String> {
    if s.is_empty() {
        return Ok(None);
    }
    NaiveDate::parse_from_str(s, "%Y-%m-%d")
        .map(Some)
        .map_err(|_| format!("expected a date (YYYY-MM-DD), found `{s}`"))
}

/// One row of a table, read by column name and type. Empty cells (and cells past the end of a
/// short row) read as `None`; a cell of the wrong type is an error.
pub struct RowReader<'a> {
    module: &'a str,
    table: &'a str,
    columns: &'static [(&'static str, &'static str, &'static str)],
    idx: &'a [usize],
    row: &'a [Cell],
    number: usize,
}

impl RowReader<'_> {
    fn error(&self, column: &str, problem: String) -> ViewError {
        ViewError {
            module: self.module.to_string(),
            output: self.table.to_string(),
            column: Some(column.to_string()),
            row: Some(self.number),
            problem,
        }
    }

    fn cell(&self, column: &str) -> Result<&Cell, ViewError> {
        let k = self
            .columns
            .iter()
            .position(|(c, _, _)| *c == column)
            .ok_or_else(|| {
                self.error(column, "the view does not declare this column".to_string())
            })?;
        Ok(self.row.get(self.idx[k]).unwrap_or(&Cell::Empty))
    }

    /// `value`, or an error saying that the cell of `column` is empty.
    pub fn required<T>(&self, column: &str, value: Option<T>) -> Result<T, ViewError> {
        value.ok_or_else(|| self.error(column, "the cell is empty".to_string()))
    }

    /// A number cell.
    pub fn number(&self, column: &str) -> Result<Option<f64>, ViewError> {
        match self.cell(column)? {
            Cell::Number(x) => Ok(Some(*x)),
            Cell::Empty => Ok(None),
            Cell::Text(s) => Err(self.error(column, format!("expected a number, found `{s}`"))),
        }
    }

    /// A text cell.
    pub fn text(&self, column: &str) -> Result<Option<&str>, ViewError> {
        match self.cell(column)? {
            Cell::Text(s) => Ok(Some(s.as_str())),
            Cell::Empty => Ok(None),
            Cell::Number(x) => Err(self.error(column, format!("expected text, found {x}"))),
        }
    }

    /// A date cell (`YYYY-MM-DD` text).
    pub fn date(&self, column: &str) -> Result<Option<NaiveDate>, ViewError> {
        match self.text(column)? {
            Some(s) => parse_date(s).map_err(|p| self.error(column, p)),
            None => Ok(None),
        }
    }

    /// A code cell.
    pub fn code<T: Code>(&self, column: &str) -> Result<Option<T>, ViewError> {
        self.text(column)?
            .map(|s| T::from_code(s).map_err(|e| self.error(column, e.to_string())))
            .transpose()
    }

    /// A `yes`/`no` cell.
    pub fn yes_no(&self, column: &str) -> Result<Option<bool>, ViewError> {
        match self.text(column)? {
            Some("yes") => Ok(Some(true)),
            Some("no") => Ok(Some(false)),
            Some(s) => Err(self.error(column, format!("expected `yes` or `no`, found `{s}`"))),
            None => Ok(None),
        }
    }
}

/// Cells as the views write them.
pub mod cell {
    use super::*;

    /// A number; a missing or non-finite one is empty.
    pub fn number(x: Option<f64>) -> Cell {
        match x {
            Some(x) if x.is_finite() => Cell::Number(x),
            _ => Cell::Empty,
        }
    }

    /// A text; a missing one is empty.
    pub fn text(s: Option<&str>) -> Cell {
        s.map_or(Cell::Empty, |s| Cell::Text(s.to_string()))
    }

    /// A date as `YYYY-MM-DD`; a missing one is empty.
    pub fn date(d: Option<NaiveDate>) -> Cell {
        d.map_or(Cell::Empty, |d| {
            Cell::Text(d.format("%Y-%m-%d").to_string())
        })
    }

    /// A code; a missing one is empty.
    pub fn code<T: Code>(c: Option<T>) -> Cell {
        c.map_or(Cell::Empty, |c| Cell::Text(c.code().to_string()))
    }

    /// `yes` or `no`; a missing one is empty.
    pub fn yes_no(b: Option<bool>) -> Cell {
        b.map_or(Cell::Empty, |b| {
            Cell::Text(if b { "yes" } else { "no" }.into())
        })
    }
}

/// Writes a module output by name, with units and labels from the module's spec.
pub struct OutputWriter {
    spec: ModuleSpec,
    out: ModuleOutput,
}

impl OutputWriter {
    /// A writer for the module described by `spec`.
    pub fn new(spec: ModuleSpec) -> Self {
        OutputWriter {
            spec,
            out: ModuleOutput::default(),
        }
    }

    /// The output written.
    pub fn finish(self) -> ModuleOutput {
        self.out
    }

    fn declared(&self, name: &str) -> (String, String) {
        match self.spec.outputs.iter().find(|o| o.name == name) {
            Some(o) => (o.unit.clone(), o.description.clone()),
            None => {
                debug_assert!(
                    false,
                    "module `{}` declares no output `{name}`",
                    self.spec.id
                );
                (String::new(), name.replace('_', " "))
            }
        }
    }

    /// Writes scalar `name` with its interval.
    pub fn interval(&mut self, name: &str, v: Interval) {
        let (unit, label) = self.declared(name);
        self.out
            .push_interval(name, v.value, v.lower, v.upper, &unit, &label);
    }

    /// Writes scalar `name`.
    pub fn scalar(&mut self, name: &str, v: Option<f64>) {
        self.interval(name, Interval::value(v));
    }

    /// Writes text `name`.
    pub fn text(&mut self, name: &str, t: &Labelled) {
        self.declared(name);
        self.out.push_text(name, &t.value, &t.label);
    }

    /// Writes text `name` as a code (its label from `T`).
    pub fn code<T: Code>(&mut self, name: &str, c: T) {
        self.declared(name);
        self.out.push_text(name, c.code(), c.label());
    }

    /// Writes text `name` as a date (`YYYY-MM-DD`; `None` as empty text).
    pub fn date(&mut self, name: &str, d: Option<NaiveDate>) {
        let (_, label) = self.declared(name);
        let value = d.map(|d| d.format("%Y-%m-%d").to_string());
        self.out
            .push_text(name, value.as_deref().unwrap_or_default(), &label);
    }

    /// Writes series `s` (its name must be declared).
    pub fn series(&mut self, s: &Series) {
        self.declared(&s.name);
        self.out.series.push(s.clone());
    }

    /// Writes table `name` with rows of `R`.
    pub fn table<R: TableRow>(&mut self, name: &str, label: &str, rows: &[R]) {
        self.declared(name);
        self.out.tables.push(crate::Table {
            name: name.into(),
            label: label.into(),
            columns: R::columns(),
            rows: rows.iter().map(R::write).collect(),
        });
    }

    /// Writes flags.
    pub fn flags<F: Code>(&mut self, flags: &[TypedFlag<F>]) {
        for f in flags {
            self.declared(f.code.code());
            self.out.flags.push(Flag {
                code: f.code.code().into(),
                severity: f.severity,
                message: f.message.clone(),
            });
        }
    }
}

/// Every output name in `out` (flags by code).
pub fn output_names(out: &ModuleOutput) -> BTreeSet<String> {
    out.scalars
        .iter()
        .map(|s| s.name.clone())
        .chain(out.texts.iter().map(|s| s.name.clone()))
        .chain(out.series.iter().map(|s| s.name.clone()))
        .chain(out.tables.iter().map(|s| s.name.clone()))
        .chain(out.flags.iter().map(|s| s.code.clone()))
        .collect()
}

/// Checks a view against a module's real output (for each module's round-trip test):
///
/// - every output `computed` holds is declared in the spec;
/// - reading the view reads every output the spec declares, and nothing else;
/// - every table column the view reads is a column the computed table has;
/// - view → output → view is the identity, and the written output declares only spec outputs.
///
/// Returns the view read from `computed`, or every problem found.
pub fn check_view<V: ModuleView + PartialEq + fmt::Debug>(
    computed: &ModuleOutput,
) -> Result<V, String> {
    let spec = V::spec();
    let declared: BTreeSet<String> = spec.outputs.iter().map(|o| o.name.clone()).collect();
    let mut problems = Vec::new();
    let undeclared: Vec<_> = output_names(computed)
        .difference(&declared)
        .cloned()
        .collect();
    if !undeclared.is_empty() {
        problems.push(format!(
            "module `{}` writes outputs its spec does not declare: {undeclared:?}",
            V::MODULE
        ));
    }
    let r = OutputReader::new(V::MODULE, computed);
    let view = match V::read(&r) {
        Ok(v) => v,
        Err(e) => return Err(format!("reading the view: {e}")),
    };
    let read = r.names_read();
    let unread: Vec<_> = declared.difference(&read).collect();
    if !unread.is_empty() {
        problems.push(format!(
            "the view of `{}` does not read declared outputs {unread:?}",
            V::MODULE
        ));
    }
    let extra: Vec<_> = read.difference(&declared).collect();
    if !extra.is_empty() {
        problems.push(format!(
            "the view of `{}` reads outputs the spec does not declare: {extra:?}",
            V::MODULE
        ));
    }
    let written = view.to_output();
    let stray: Vec<_> = output_names(&written)
        .difference(&declared)
        .cloned()
        .collect();
    if !stray.is_empty() {
        problems.push(format!("the view writes undeclared outputs {stray:?}"));
    }
    match V::from_output(&written) {
        Ok(again) if again == view => {}
        Ok(again) => problems.push(format!(
            "view → output → view changed the view:\n{view:#?}\n→\n{again:#?}"
        )),
        Err(e) => problems.push(format!("reading the written output: {e}")),
    }
    if problems.is_empty() {
        Ok(view)
    } else {
        Err(problems.join("\n"))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::{OutputSpec, Table};

    code_enum! {
        /// Test kinds.
        enum Kind {
            /// A.
            Alpha = "alpha" => "Alpha",
            /// B.
            Beta = "beta_two" => "Beta two",
        }
    }

    #[derive(Debug, PartialEq)]
    struct Row {
        kind: Option<Kind>,
        day: Option<NaiveDate>,
        x: Option<f64>,
    }

    impl TableRow for Row {
        const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
            ("kind", "", "Kind"),
            ("day", "", "Day"),
            ("x_kg", "kg", "X"),
        ];
        fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
            Ok(Row {
                kind: r.code("kind")?,
                day: r.date("day")?,
                x: r.number("x_kg")?,
            })
        }
        fn write(&self) -> Vec<Cell> {
            vec![
                cell::code(self.kind),
                cell::date(self.day),
                cell::number(self.x),
            ]
        }
    }

    fn table(rows: Vec<Vec<Cell>>) -> ModuleOutput {
        ModuleOutput {
            tables: vec![Table {
                name: "rows".into(),
                label: "Rows".into(),
                columns: Row::columns(),
                rows,
            }],
            ..Default::default()
        }
    }

    #[test]
    fn codes_parse_print_and_refuse_unknown_text() {
        assert_eq!("beta_two".parse::<Kind>().unwrap(), Kind::Beta);
        assert_eq!(Kind::Alpha.to_string(), "alpha");
        assert_eq!(Kind::Beta.label(), "Beta two");
        let e = "gamma".parse::<Kind>().unwrap_err();
        assert_eq!(
            e.to_string(),
            "expected one of alpha, beta_two, found `gamma`"
        );
    }

    #[test]
    fn table_cells_read_by_name_and_type() {
        let d = NaiveDate::from_ymd_opt(2026, 3, 2).unwrap();
        let out = table(vec![
            vec![
                Cell::Text("beta_two".into()),
                Cell::Text("2026-03-02".into()),
                Cell::Number(81.5),
            ],
            // A short row: the missing cells are empty.
            vec![Cell::Text("alpha".into())],
        ]);
        let rows: Vec<Row> = OutputReader::new("demo", &out).table("rows").unwrap();
        assert_eq!(
            rows,
            vec![
                Row {
                    kind: Some(Kind::Beta),
                    day: Some(d),
                    x: Some(81.5)
                },
                Row {
                    kind: Some(Kind::Alpha),
                    day: None,
                    x: None
                }
            ]
        );
    }

    #[test]
    fn errors_name_the_module_output_column_and_row() {
        let out = table(vec![vec![
            Cell::Text("alpha".into()),
            Cell::Text("2 March".into()),
            Cell::Empty,
        ]]);
        let e = OutputReader::new("demo", &out)
            .table::<Row>("rows")
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            "module `demo`, output `rows`, column `day`, row 1: expected a date (YYYY-MM-DD), found `2 March`"
        );
        let mut renamed = table(vec![]);
        renamed.tables[0].columns[2].name = "x".into();
        let e = OutputReader::new("demo", &renamed)
            .table::<Row>("rows")
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            "module `demo`, output `rows`, column `x_kg`: the column is missing"
        );
        let e = OutputReader::new("demo", &out)
            .scalar("weight_kg")
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            "module `demo`, output `weight_kg`: the scalar is missing"
        );
        let num_as_text = table(vec![vec![Cell::Number(1.0)]]);
        let e = OutputReader::new("demo", &num_as_text)
            .table::<Row>("rows")
            .unwrap_err();
        assert_eq!(e.column.as_deref(), Some("kind"));
        assert_eq!(e.problem, "expected text, found 1");
    }

    #[test]
    fn scalars_texts_and_optional_outputs() {
        let mut out = ModuleOutput::default();
        out.push_interval("w_kg", Some(80.0), Some(79.0), Some(81.0), "kg", "W");
        out.push_text("kind", "alpha", "Alpha");
        out.push_text("onset", "", "Onset");
        let r = OutputReader::new("demo", &out);
        assert_eq!(
            r.interval("w_kg").unwrap(),
            Interval {
                value: Some(80.0),
                lower: Some(79.0),
                upper: Some(81.0)
            }
        );
        assert_eq!(r.code::<Kind>("kind").unwrap(), Kind::Alpha);
        assert_eq!(r.date("onset").unwrap(), None);
        assert_eq!(r.optional("absent", || r.scalar("absent")).unwrap(), None);
        assert!(r.code::<Kind>("onset").is_err());
        let read: Vec<String> = r.names_read().into_iter().collect();
        assert_eq!(read, ["absent", "kind", "onset", "w_kg"]);
    }

    #[derive(Debug, PartialEq)]
    struct Demo {
        w: Interval,
        kind: Kind,
        rows: Vec<Row>,
    }

    impl ModuleView for Demo {
        const MODULE: &'static str = "demo";
        fn spec() -> ModuleSpec {
            ModuleSpec {
                id: "demo".into(),
                version: "1.0.0".into(),
                description: "demo".into(),
                settings: vec![],
                outputs: vec![
                    OutputSpec::new("w_kg", "scalar", "kg", "W"),
                    OutputSpec::new("kind", "text", "", "Kind"),
                    OutputSpec::new("rows", "table", "", "Rows"),
                ],
                requires: vec![],
            }
        }
        fn read(r: &OutputReader<'_>) -> Result<Self, ViewError> {
            Ok(Demo {
                w: r.interval("w_kg")?,
                kind: r.code("kind")?,
                rows: r.table("rows")?,
            })
        }
        fn write(&self, w: &mut OutputWriter) {
            w.interval("w_kg", self.w);
            w.code("kind", self.kind);
            w.table("rows", "Rows", &self.rows);
        }
    }

    #[test]
    fn check_view_finds_unread_and_undeclared_outputs() {
        let mut out = table(vec![vec![Cell::Text("alpha".into())]]);
        out.push_scalar("w_kg", Some(80.0), "kg", "W");
        out.push_text("kind", "beta_two", "B");
        let v: Demo = check_view(&out).unwrap();
        assert_eq!(v.kind, Kind::Beta);
        assert_eq!(v.to_output().scalars[0].unit, "kg");
        out.push_scalar("extra_kg", None, "kg", "X");
        let e = check_view::<Demo>(&out).unwrap_err();
        assert!(e.contains("does not declare: [\"extra_kg\"]"), "{e}");
    }
}

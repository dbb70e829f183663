//! Typed outputs of a metric module: scalars, dated series, tables and flags, each with units.

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};

/// A named number with its unit. `value` is `None` when there was too little data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Scalar {
    /// snake_case name, with the unit as a suffix where there is one (`tdee_kcal_per_day`).
    pub name: String,
    /// The value, or `None` when it could not be computed.
    pub value: Option<f64>,
    /// Unit (`kcal/d`, `kg`, `%`, `kg/m2`, …); empty when unitless.
    pub unit: String,
    /// Lower bound of its interval (e.g. 95 %), when it has one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lower: Option<f64>,
    /// Upper bound of its interval, when it has one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub upper: Option<f64>,
    /// Short human label.
    pub label: String,
}

/// A text value (a category, a classification, a method name).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TextValue {
    /// snake_case name.
    pub name: String,
    /// The text (a stable code such as `obesity_class_1`, not prose).
    pub value: String,
    /// Short human label of the value.
    pub label: String,
}

/// One point of a dated series.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Point {
    /// Day (for weekly series, the Monday of the week or the week's first day in the period).
    pub date: NaiveDate,
    /// The value.
    pub value: f64,
    /// Lower bound of its band, when it has one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub lower: Option<f64>,
    /// Upper bound of its band, when it has one.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub upper: Option<f64>,
}

/// A dated series (daily trend, weekly adherence, forecast …).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Series {
    /// snake_case name (`weight_trend`, `weekly_activity_minutes`).
    pub name: String,
    /// Unit of the values.
    pub unit: String,
    /// `daily`, `weekly` or `irregular`.
    pub step: String,
    /// Short human label.
    pub label: String,
    /// Points, sorted by date.
    pub points: Vec<Point>,
}

/// One cell of a table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(untagged)]
pub enum Cell {
    /// A number.
    Number(f64),
    /// Text (dates are written as ISO `YYYY-MM-DD` text).
    Text(String),
    /// Missing.
    Empty,
}

/// A column of a table.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Column {
    /// snake_case name with unit suffix.
    pub name: String,
    /// Unit, empty when unitless.
    pub unit: String,
    /// Short human label.
    pub label: String,
}

impl Column {
    /// A column with its unit (empty when unitless) and label.
    pub fn new(name: &str, unit: &str, label: &str) -> Self {
        Column {
            name: name.into(),
            unit: unit.into(),
            label: label.into(),
        }
    }
}

/// A table (plateau periods, weekly adherence, what-it-takes options …).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Table {
    /// snake_case name.
    pub name: String,
    /// Short human label.
    pub label: String,
    /// Columns.
    pub columns: Vec<Column>,
    /// Rows; each has one cell per column.
    pub rows: Vec<Vec<Cell>>,
}

/// Severity of a flag.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FlagSeverity {
    /// For information.
    Info,
    /// Worth a look.
    Notice,
    /// Should be reviewed by a licensed clinician.
    Clinical,
}

/// A flag raised about a participant.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Flag {
    /// Stable code (`fast_loss`, `low_intake`, `lab_diabetes_range`, `insufficient_data` …).
    pub code: String,
    /// Severity.
    pub severity: FlagSeverity,
    /// Plain-words message for the participant's report.
    pub message: String,
}

/// Everything a module returns for one participant.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct ModuleOutput {
    /// Named numbers.
    #[serde(default)]
    pub scalars: Vec<Scalar>,
    /// Named texts (categories, classifications).
    #[serde(default)]
    pub texts: Vec<TextValue>,
    /// Dated series.
    #[serde(default)]
    pub series: Vec<Series>,
    /// Tables.
    #[serde(default)]
    pub tables: Vec<Table>,
    /// Flags.
    #[serde(default)]
    pub flags: Vec<Flag>,
}

impl ModuleOutput {
    /// The value of scalar `name`, if present and not missing.
    pub fn scalar(&self, name: &str) -> Option<f64> {
        self.scalars.iter().find(|s| s.name == name)?.value
    }

    /// Scalar `name` with its interval.
    pub fn scalar_full(&self, name: &str) -> Option<&Scalar> {
        self.scalars.iter().find(|s| s.name == name)
    }

    /// Text `name`.
    pub fn text(&self, name: &str) -> Option<&str> {
        Some(self.texts.iter().find(|t| t.name == name)?.value.as_str())
    }

    /// Series `name`.
    pub fn series(&self, name: &str) -> Option<&Series> {
        self.series.iter().find(|s| s.name == name)
    }

    /// Table `name`.
    pub fn table(&self, name: &str) -> Option<&Table> {
        self.tables.iter().find(|t| t.name == name)
    }

    /// Adds a scalar.
    pub fn push_scalar(&mut self, name: &str, value: Option<f64>, unit: &str, label: &str) {
        self.scalars.push(Scalar {
            name: name.into(),
            value: value.filter(|v| v.is_finite()),
            unit: unit.into(),
            lower: None,
            upper: None,
            label: label.into(),
        });
    }

    /// Adds a scalar with an interval.
    pub fn push_interval(
        &mut self,
        name: &str,
        value: Option<f64>,
        lower: Option<f64>,
        upper: Option<f64>,
        unit: &str,
        label: &str,
    ) {
        let (lower, upper) = (
            lower.filter(|v| v.is_finite()),
            upper.filter(|v| v.is_finite()),
        );
        // A module that passes its bounds the wrong way round is a bug; tests (debug builds)
        // catch it here for every interval of every module.
        debug_assert!(
            !matches!((lower, upper), (Some(l), Some(u)) if l > u + 1e-9),
            "{name}: lower bound {lower:?} above upper bound {upper:?}"
        );
        self.scalars.push(Scalar {
            name: name.into(),
            value: value.filter(|v| v.is_finite()),
            unit: unit.into(),
            lower,
            upper,
            label: label.into(),
        });
    }

    /// Adds a text value.
    pub fn push_text(&mut self, name: &str, value: &str, label: &str) {
        self.texts.push(TextValue {
            name: name.into(),
            value: value.into(),
            label: label.into(),
        });
    }

    /// Adds a flag.
    pub fn push_flag(&mut self, code: &str, severity: FlagSeverity, message: impl Into<String>) {
        self.flags.push(Flag {
            code: code.into(),
            severity,
            message: message.into(),
        });
    }
}

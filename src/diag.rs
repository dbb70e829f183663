//! Diagnostics as data: every problem found in the inputs, with where it is, what was expected,
//! what was found and a hint. Loaders collect them instead of stopping at the first.

use serde::Serialize;
use std::fmt;

/// How bad a problem is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Severity {
    /// A value was dropped or looks wrong; the rest of the file or participant is still used.
    Warning,
    /// The participant or the file cannot be used (or, at program level, the run cannot start).
    Error,
}

/// One problem in the inputs.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Diagnostic {
    /// Error or warning.
    pub severity: Severity,
    /// Participant id (folder name) the problem belongs to; `None` for program-level problems.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub participant: Option<String>,
    /// File, relative to the program folder (`participants/LW-0147/weights.csv`).
    pub file: String,
    /// 1-based line, when known.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub line: Option<u64>,
    /// 1-based column (field number in a CSV row, character column in YAML), when known.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub column: Option<u64>,
    /// The CSV column name or YAML key path the problem is in, when known.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub field: Option<String>,
    /// What is wrong, in one line.
    pub message: String,
    /// What was expected.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub expected: Option<String>,
    /// What was found.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub found: Option<String>,
    /// What to do about it.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub hint: Option<String>,
}

impl Diagnostic {
    /// A new error about `file`.
    pub fn error(file: impl Into<String>, message: impl Into<String>) -> Self {
        Self::new(Severity::Error, file, message)
    }

    /// A new warning about `file`.
    pub fn warning(file: impl Into<String>, message: impl Into<String>) -> Self {
        Self::new(Severity::Warning, file, message)
    }

    fn new(severity: Severity, file: impl Into<String>, message: impl Into<String>) -> Self {
        Diagnostic {
            severity,
            participant: None,
            file: file.into(),
            line: None,
            column: None,
            field: None,
            message: message.into(),
            expected: None,
            found: None,
            hint: None,
        }
    }

    /// Sets the participant.
    pub fn participant(mut self, id: impl Into<String>) -> Self {
        self.participant = Some(id.into());
        self
    }

    /// Sets line and column.
    pub fn at(mut self, line: u64, column: Option<u64>) -> Self {
        self.line = Some(line);
        self.column = column;
        self
    }

    /// Sets the CSV column or YAML key path.
    pub fn field(mut self, field: impl Into<String>) -> Self {
        self.field = Some(field.into());
        self
    }

    /// Sets what was expected.
    pub fn expected(mut self, expected: impl Into<String>) -> Self {
        self.expected = Some(expected.into());
        self
    }

    /// Sets what was found.
    pub fn found(mut self, found: impl Into<String>) -> Self {
        self.found = Some(found.into());
        self
    }

    /// Sets the hint.
    pub fn hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(hint.into());
        self
    }

    /// `file:line:column`, as far as known.
    pub fn location(&self) -> String {
        let mut s = self.file.clone();
        if let Some(l) = self.line {
            s.push_str(&format!(":{l}"));
            if let Some(c) = self.column {
                s.push_str(&format!(":{c}"));
            }
        }
        s
    }
}

impl fmt::Display for Diagnostic {
    /// Human form, e.g.
    ///
    /// ```text
    /// error: participants/LW-0147/weights.csv:14:2: weight out of range
    ///   column: weight; expected: a weight between 25 and 350 kg; found: `720`
    ///   hint: …
    /// ```
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        let sev = match self.severity {
            Severity::Error => "error",
            Severity::Warning => "warning",
        };
        write!(f, "{sev}: {}: {}", self.location(), self.message)?;
        let mut parts = Vec::new();
        if let Some(c) = &self.field {
            parts.push(format!("in: {c}"));
        }
        if let Some(e) = &self.expected {
            parts.push(format!("expected: {e}"));
        }
        if let Some(x) = &self.found {
            parts.push(format!("found: {x}"));
        }
        if !parts.is_empty() {
            write!(f, "\n  {}", parts.join("; "))?;
        }
        if let Some(h) = &self.hint {
            write!(f, "\n  hint: {h}")?;
        }
        Ok(())
    }
}

/// Counts of errors and warnings in a list of diagnostics.
pub fn count(diags: &[Diagnostic]) -> (usize, usize) {
    let errors = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .count();
    (errors, diags.len() - errors)
}

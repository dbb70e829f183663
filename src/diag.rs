//! Diagnostics as data: every problem found in the inputs, with where it is, what was expected,
//! what was found and a hint. Loaders collect them instead of stopping at the first.

use serde::Serialize;
use std::fmt;

/// How bad a problem is.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
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
            message: clip(message.into()),
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
        self.field = Some(clip(field.into()));
        self
    }

    /// Sets what was expected.
    pub fn expected(mut self, expected: impl Into<String>) -> Self {
        self.expected = Some(clip(expected.into()));
        self
    }

    /// Sets what was found.
    pub fn found(mut self, found: impl Into<String>) -> Self {
        self.found = Some(clip(found.into()));
        self
    }

    /// Sets the hint.
    pub fn hint(mut self, hint: impl Into<String>) -> Self {
        self.hint = Some(clip(hint.into()));
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

/// The level a diagnostic is logged at (see [`Diagnostic::log`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LogLevel {
    /// ERROR: what the exit code is about (a participant or file left out).
    Error,
    /// WARN.
    Warn,
    /// DEBUG (warnings a run counts rather than lists).
    Debug,
}

/// Names of the fields a logged diagnostic carries besides its message (the text log leaves
/// them out: its message already says them).
pub const LOG_FIELDS: [&str; 5] = ["participant", "file", "line", "column", "field"];

impl Diagnostic {
    /// Logs `text` (the diagnostic in words) with where it is as fields of its own
    /// (`participant`, `file`, `line`, `column`, `field`, each when known), so a JSON log line
    /// can be filtered and grouped by participant or file without parsing its message.
    pub fn log(&self, level: LogLevel, text: &str) {
        let participant = self.participant.as_deref().map(printable);
        let participant = participant.as_deref();
        let file = printable(&self.file);
        let file: &str = &file;
        let field = self.field.as_deref().map(printable);
        let field = field.as_deref();
        let (line, column) = (self.line, self.column);
        macro_rules! at {
            ($mac:ident) => {
                tracing::$mac!(participant, file, line, column, field, "{text}")
            };
        }
        match level {
            LogLevel::Error => at!(error),
            LogLevel::Warn => at!(warn),
            LogLevel::Debug => at!(debug),
        }
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
        // Every part may hold text from an input file: control characters are shown escaped,
        // so nothing from a file can move the cursor, clear the screen or forge a line.
        write!(
            f,
            "{sev}: {}: {}",
            printable(&self.location()),
            printable(&self.message)
        )?;
        let mut parts = Vec::new();
        if let Some(c) = &self.field {
            parts.push(format!("in: {}", printable(c)));
        }
        if let Some(e) = &self.expected {
            parts.push(format!("expected: {}", printable(e)));
        }
        if let Some(x) = &self.found {
            parts.push(format!("found: {}", printable(x)));
        }
        if !parts.is_empty() {
            write!(f, "\n  {}", parts.join("; "))?;
        }
        if let Some(h) = &self.hint {
            write!(f, "\n  hint: {}", printable(h))?;
        }
        Ok(())
    }
}

/// `s` cut to [`crate::limits::MAX_DIAGNOSTIC_TEXT_CHARS`] characters, with how much was left
/// out. Diagnostics quote what they found, and a file may hold anything: a 60 MB header line
/// without a delimiter was quoted whole in the message, the log, the data-quality list and the
/// participant's partial result (800 MB resident for one participant).
fn clip(s: String) -> String {
    let s = compact_digits(s);
    match s
        .char_indices()
        .nth(crate::limits::MAX_DIAGNOSTIC_TEXT_CHARS)
    {
        None => s,
        Some((cut, _)) => {
            let rest = s[cut..].chars().count();
            format!("{}… ({} more characters)", &s[..cut], thousands(rest))
        }
    }
}

/// Longest run of digits a diagnostic shows whole. No measured value needs more (an `f64`
/// holds 17 significant digits); longer runs are a number such as `1e308` printed in full
/// or a cell of hundreds of digits.
const MAX_DIGIT_RUN: usize = 24;

/// `s` with each run of more than [`MAX_DIGIT_RUN`] ASCII digits shown by its first six and last
/// three digits and its length: `1000000…000 (309 digits)`. A weight, lab value or intake of
/// `1e308` (a 309-digit cell, or a YAML float printed with `{}`) filled the message, the
/// terminal and the log with hundreds of zeros.
fn compact_digits(s: String) -> String {
    let b = s.as_bytes();
    let mut longest = 0;
    let mut run = 0;
    for &c in b {
        run = if c.is_ascii_digit() { run + 1 } else { 0 };
        longest = longest.max(run);
    }
    if longest <= MAX_DIGIT_RUN {
        return s;
    }
    let mut out = String::with_capacity(64);
    let mut rest = s.as_str();
    while let Some(start) = rest.find(|c: char| c.is_ascii_digit()) {
        out.push_str(&rest[..start]);
        let digits = &rest[start..];
        let len = digits
            .find(|c: char| !c.is_ascii_digit())
            .unwrap_or(digits.len());
        if len > MAX_DIGIT_RUN {
            out.push_str(&format!(
                "{}…{} ({} digits)",
                &digits[..6],
                &digits[len - 3..len],
                thousands(len)
            ));
        } else {
            out.push_str(&digits[..len]);
        }
        rest = &digits[len..];
    }
    out.push_str(rest);
    out
}

/// A number read from an input, for a message: as Rust prints it from 0.000001 to below 10^15
/// (`72.5`, `-5`, `0.001`), else in exponent form (`1e308`, `1.5e-12`), never hundreds of
/// digits.
pub fn number(v: f64) -> String {
    let a = v.abs();
    if a == 0.0 || !v.is_finite() || (1e-6..1e15).contains(&a) {
        v.to_string()
    } else {
        format!("{v:e}")
    }
}

/// `s` with every control character (C0, DEL, C1, including tab and line breaks) and every
/// bidirectional-override character shown as an escape (`\u{1b}`, `\n`), for text printed to a
/// terminal or a log. Text without them is borrowed unchanged.
pub fn printable(s: &str) -> std::borrow::Cow<'_, str> {
    let hidden =
        |c: char| c.is_control() || matches!(c, '\u{202a}'..='\u{202e}' | '\u{2066}'..='\u{2069}');
    if !s.chars().any(hidden) {
        return std::borrow::Cow::Borrowed(s);
    }
    let mut out = String::with_capacity(s.len() + 8);
    for c in s.chars() {
        if matches!(c, '\n' | '\r' | '\t') {
            out.extend(c.escape_default());
        } else if hidden(c) {
            out.extend(c.escape_unicode());
        } else {
            out.push(c);
        }
    }
    std::borrow::Cow::Owned(out)
}

/// [`printable`] `s`, with what lies beyond its first and last `keep` characters replaced by
/// `…` and how many were left out: for a path a message quotes from a folder's listing, where
/// a chain of 20,000 nested folders was quoted whole (40,000 characters in one message).
///
/// Cut before it is made printable, so an escape (`\u{1b}`) is never cut in two.
pub fn printable_clipped(s: &str, keep: usize) -> String {
    let n = s.chars().count();
    if n <= 2 * keep + 1 {
        return printable(s).into_owned();
    }
    let head: String = s.chars().take(keep).collect();
    let tail: String = s.chars().skip(n - keep).collect();
    format!(
        "{}… ({} more characters) …{}",
        printable(&head),
        thousands(n - 2 * keep),
        printable(&tail)
    )
}

/// Counts of errors and warnings in a list of diagnostics.
pub fn count(diags: &[Diagnostic]) -> (usize, usize) {
    let errors = diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .count();
    (errors, diags.len() - errors)
}

/// Keeps the first [`crate::limits::MAX_DIAGNOSTICS_PER_KIND`] diagnostics of each kind among
/// `diags[from..]` (the diagnostics of one file) and replaces the rest of each kind by one
/// summary, "… and 9,990 more like this: …", at the line of the first one left out. A kind is
/// the severity, the column and the message with its numbers left out, so "row has 4 fields"
/// and "row has 5 fields" are one kind.
pub fn cap_per_kind(diags: &mut Vec<Diagnostic>, from: usize) {
    use std::collections::HashMap;
    let max = crate::limits::MAX_DIAGNOSTICS_PER_KIND;
    if diags.len().saturating_sub(from) <= max {
        return;
    }
    let kind = |d: &Diagnostic| -> (Severity, Option<String>, String) {
        let shape: String = d
            .message
            .chars()
            .filter(|c| !c.is_ascii_digit() && *c != ',' && *c != '.')
            .collect();
        (d.severity, d.field.clone(), shape)
    };
    // Per kind: how many seen, and the index of its summary in `summaries` once there is one.
    type Kind = (Severity, Option<String>, String);
    let mut seen: HashMap<Kind, (usize, Option<usize>)> = HashMap::new();
    let tail: Vec<Diagnostic> = diags.drain(from..).collect();
    // (index in `diags` of the summary, how many it stands for).
    let mut summaries: Vec<(usize, usize)> = Vec::new();
    for d in tail {
        let entry = seen.entry(kind(&d)).or_insert((0, None));
        entry.0 += 1;
        if entry.0 <= max {
            diags.push(d);
            continue;
        }
        match entry.1 {
            Some(i) => summaries[i].1 += 1,
            None => {
                entry.1 = Some(summaries.len());
                summaries.push((diags.len(), 1));
                let mut summary = d;
                summary.expected = None;
                summary.found = None;
                summary.column = None;
                diags.push(summary);
            }
        }
    }
    for (at, n) in summaries {
        let d = &mut diags[at];
        d.message = format!("… and {} more like this: {}", thousands(n), d.message);
        d.hint = Some(
            "only the first problems of each kind in a file are listed; fix them and check again"
                .into(),
        );
    }
}

/// `9990` → `9,990`.
pub fn thousands(n: usize) -> String {
    let s = n.to_string();
    let mut out = String::new();
    for (i, c) in s.chars().enumerate() {
        if i > 0 && (s.len() - i).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A clipped path is cut before its control characters are shown as escapes: cut after,
    /// `\u{1b}` could lose its closing brace.
    #[test]
    fn a_clipped_path_never_cuts_an_escape_in_two() {
        let s = format!("{}\u{1b}{}", "a".repeat(58), "b".repeat(200));
        let shown = printable_clipped(&s, 60);
        assert!(
            shown.starts_with(&format!("{}\\u{{1b}}b…", "a".repeat(58))),
            "{shown}"
        );
        assert!(shown.contains("(139 more characters)"), "{shown}");
        assert!(shown.ends_with(&"b".repeat(60)), "{shown}");
    }

    #[test]
    fn hundreds_of_digits_are_shown_compactly() {
        let big = format!("1{}", "0".repeat(308));
        let d = Diagnostic::warning("w.csv", format!("implausible intake of {big} kcal"))
            .found(format!("`{big}`"))
            .expected("at most 10000 kcal");
        assert_eq!(
            d.message,
            "implausible intake of 100000…000 (309 digits) kcal"
        );
        assert_eq!(d.found.as_deref(), Some("`100000…000 (309 digits)`"));
        // Ordinary numbers, dates and 24 digits are untouched.
        let ok = "72.5 kg on 2026-04-09, 123456789012345678901234";
        assert_eq!(Diagnostic::warning("w.csv", ok).message, ok);
        // A tiny value printed in full is a run of zeros after the point.
        assert_eq!(
            compact_digits(format!("{}", 1e-300)),
            "0.000000…001 (300 digits)"
        );
        assert_eq!(number(1e308), "1e308");
        assert_eq!(number(-1.5e-12), "-1.5e-12");
        assert_eq!(number(f64::MAX), "1.7976931348623157e308");
        assert_eq!(number(72.5), "72.5");
        assert_eq!(number(-5.0), "-5");
        assert_eq!(number(10000.0), "10000");
    }

    #[test]
    fn control_characters_are_shown_escaped() {
        let d = Diagnostic::warning("p/a\u{1b}[2J.csv", "bad `\u{0}x`")
            .at(3, Some(1))
            .found("`\u{1b}]0;title\u{7}\u{9b}\u{202e}abc\n`")
            .hint("fine");
        let shown = d.to_string();
        assert_eq!(
            shown,
            "warning: p/a\\u{1b}[2J.csv:3:1: bad `\\u{0}x`\n  found: `\\u{1b}]0;title\\u{7}\\u{9b}\\u{202e}abc\\n`\n  hint: fine"
        );
        assert!(!shown.chars().any(|c| c.is_control() && c != '\n'));
        assert!(matches!(
            printable("plain – text"),
            std::borrow::Cow::Borrowed(_)
        ));
    }

    #[test]
    fn long_text_in_a_diagnostic_is_cut_with_how_much_was_left_out() {
        let d = Diagnostic::error("f.csv", "é".repeat(1500))
            .found("x".repeat(1000))
            .expected("y".repeat(1001))
            .hint("short");
        assert_eq!(
            d.message,
            format!("{}… (500 more characters)", "é".repeat(1000))
        );
        assert_eq!(d.found.as_deref(), Some("x".repeat(1000).as_str()));
        assert_eq!(
            d.expected.as_deref(),
            Some(format!("{}… (1 more characters)", "y".repeat(1000)).as_str())
        );
        assert_eq!(d.hint.as_deref(), Some("short"));
    }

    #[test]
    fn thousands_separators() {
        assert_eq!(thousands(7), "7");
        assert_eq!(thousands(9990), "9,990");
        assert_eq!(thousands(1_234_567), "1,234,567");
    }

    #[test]
    fn only_the_first_of_each_kind_are_kept_with_a_count() {
        let mut diags = vec![Diagnostic::error("other.csv", "kept whatever")];
        for line in 1..=10_000u64 {
            diags.push(
                Diagnostic::warning("w.csv", format!("row has {} fields", 4 + line % 3))
                    .at(line, None)
                    .found("x"),
            );
            if line % 2 == 0 {
                diags.push(
                    Diagnostic::warning("w.csv", "`weight` is empty")
                        .at(line, Some(2))
                        .field("weight"),
                );
            }
        }
        cap_per_kind(&mut diags, 1);
        let max = crate::limits::MAX_DIAGNOSTICS_PER_KIND;
        assert_eq!(diags.len(), 1 + 2 * (max + 1));
        assert_eq!(diags[0].file, "other.csv");
        let summaries: Vec<&Diagnostic> = diags
            .iter()
            .filter(|d| d.message.starts_with("… and"))
            .collect();
        assert_eq!(summaries.len(), 2);
        assert_eq!(
            summaries[0].message,
            format!(
                "… and {} more like this: row has 4 fields",
                thousands(10_000 - max)
            )
        );
        assert_eq!(summaries[0].line, Some(max as u64 + 1));
        assert!(summaries[0].found.is_none());
        assert_eq!(
            summaries[1].message,
            format!(
                "… and {} more like this: `weight` is empty",
                thousands(5_000 - max)
            )
        );
        // Few diagnostics are left alone.
        let mut few = diags[..5].to_vec();
        cap_per_kind(&mut few, 0);
        assert_eq!(few, diags[..5].to_vec());
    }
}

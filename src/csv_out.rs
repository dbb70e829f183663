//! Every CSV file the tool writes goes through [`Writer`], which makes each text cell safe to open
//! in a spreadsheet.
//!
//! A cell that begins with `=`, `+`, `-`, `@`, a tab or a carriage return is read by spreadsheet
//! programs as a formula ("CSV injection"), and text from input files or external modules (a
//! site label, a module's text) can begin that way. Such a cell gets a single quote `'` in front,
//! as the OWASP guidance on CSV injection recommends (OWASP Foundation, "CSV Injection",
//! owasp.org/www-community/attacks/CSV_Injection); quoting and doubling of embedded quotes is the
//! `csv` crate's. A cell that is a plain number (`-3.2`, `+5`, `-1e-3`) is left as it is, so
//! numbers stay numbers. Control characters other than tab and line breaks, and bidirectional
//! overrides, are written as escapes (`\u{1b}`), as in the log.

use std::borrow::Cow;
use std::io::Write;

/// First characters that make a spreadsheet read a cell as a formula (OWASP, "CSV Injection").
const FORMULA_LEADS: [char; 6] = ['=', '+', '-', '@', '\t', '\r'];

/// Whether `s` is a plain decimal number: digits, sign, point and exponent only, and a finite
/// value (so `-inf`, `-NaN` and `-2+3` are not numbers here).
fn is_plain_number(s: &str) -> bool {
    s.bytes()
        .all(|b| b.is_ascii_digit() || matches!(b, b'+' | b'-' | b'.' | b'e' | b'E'))
        && s.parse::<f64>().is_ok_and(f64::is_finite)
}

/// Characters a CSV cell never holds raw: control characters other than tab and line breaks
/// (an ESC sequence retitles or clears the terminal of whoever `cat`s the file) and
/// bidirectional overrides, isolates and marks (which reorder what a reader sees): the
/// report's own list ([`crate::text::is_invisible_control`]).
fn hidden(c: char) -> bool {
    crate::text::is_invisible_control(c)
}

/// `s` as a CSV cell that a spreadsheet opens as data: a `'` in front of text that begins like a
/// formula, and hidden characters shown as escapes (`\u{1b}`, as in the log); numbers and
/// everything else unchanged.
pub fn cell(s: &str) -> Cow<'_, str> {
    let s: Cow<'_, str> = if s.chars().any(hidden) {
        Cow::Owned(
            s.chars()
                .map(|c| {
                    if hidden(c) {
                        c.escape_unicode().to_string()
                    } else {
                        c.to_string()
                    }
                })
                .collect(),
        )
    } else {
        Cow::Borrowed(s)
    };
    if s.starts_with(FORMULA_LEADS) && !is_plain_number(&s) {
        Cow::Owned(format!("'{s}"))
    } else {
        s
    }
}

/// A CSV writer whose every cell passes through [`cell`]. It is the only way the tool writes
/// CSV output.
pub struct Writer<W: Write>(csv::Writer<W>);

impl<W: Write> Writer<W> {
    /// A writer with the `csv` crate's defaults (comma, `"` quoting when needed, `\n` endings).
    pub fn from_writer(w: W) -> Self {
        Writer(csv::Writer::from_writer(w))
    }

    /// Writes one record, each field made safe with [`cell`].
    pub fn write_record<I, T>(&mut self, record: I) -> csv::Result<()>
    where
        I: IntoIterator<Item = T>,
        T: AsRef<str>,
    {
        self.0
            .write_record(record.into_iter().map(|f| cell(f.as_ref()).into_owned()))
    }

    /// Flushes and returns the underlying writer.
    pub fn into_inner(self) -> std::io::Result<W> {
        self.0.into_inner().map_err(|e| e.into_error())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_like_text_is_quoted_and_numbers_are_not() {
        assert_eq!(
            cell("=HYPERLINK(\"http://x\",\"y\")"),
            "'=HYPERLINK(\"http://x\",\"y\")"
        );
        assert_eq!(cell("+cmd"), "'+cmd");
        assert_eq!(cell("-2+3"), "'-2+3");
        assert_eq!(cell("@SUM(A1:A2)"), "'@SUM(A1:A2)");
        assert_eq!(cell("\t=1"), "'\t=1");
        assert_eq!(cell("\r=1"), "'\r=1");
        assert_eq!(cell("-inf"), "'-inf");
        assert_eq!(cell("-"), "'-");
        for number in ["-3.2", "+5", "-1e-3", "-0", "42", "2027-03-01"] {
            assert_eq!(cell(number), number);
        }
        for text in ["East Yard", "", "a=b", " =1", "'=1"] {
            assert_eq!(cell(text), text);
        }
    }

    /// Direction marks (U+200E/F, U+061C) were written raw while the overrides were escaped.
    #[test]
    fn direction_marks_are_escaped_like_overrides() {
        assert_eq!(cell("a\u{200f}b"), "a\\u{200f}b");
        assert_eq!(cell("a\u{061c}b"), "a\\u{61c}b");
        assert_eq!(cell("a\u{202e}b"), "a\\u{202e}b");
        assert_eq!(cell("سارة"), "سارة");
    }

    #[test]
    fn the_writer_escapes_every_field() {
        let mut w = Writer::from_writer(Vec::new());
        w.write_record(["=1+1", "-3.2", "plain", "@x,\"y\""])
            .unwrap();
        let out = String::from_utf8(w.into_inner().unwrap()).unwrap();
        assert_eq!(out, "'=1+1,-3.2,plain,\"'@x,\"\"y\"\"\"\n");
    }
}

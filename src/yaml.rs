//! The one place YAML is parsed. Everything else calls [`from_str`], so a maintained fork of the
//! YAML crate could replace serde_yaml (0.9, no longer updated upstream) here alone.
//!
//! serde_yaml's own limits do not protect us from hostile files: its alias "repetition limit"
//! grows with the file, so one large anchor referenced 20,000 times expands to gigabytes, and
//! its parser reads a whole 100,000-level nesting before refusing it. So every text first goes
//! through a budgeted pass over its event stream ([`check_budget`], with the maintained
//! `saphyr-parser`): events, aliases, nesting depth and the size the document has once every
//! alias is expanded are counted, and the text is refused as soon as one is over its limit
//! ([`crate::limits`]), before serde_yaml sees it. Errors are turned into a [`Diagnostic`] with
//! line, column, key path and a hint.

use crate::diag::Diagnostic;
use crate::limits::{MAX_YAML_ALIASES, MAX_YAML_DEPTH, MAX_YAML_EVENTS, MAX_YAML_EXPANDED};
use saphyr_parser::{Event, Parser};
use serde::de::DeserializeOwned;

/// Parses `text` (the content of `file`, a path relative to the program folder) into `T`.
///
/// On failure the diagnostic names the line and column, the key path (`program.start`) when
/// serde_yaml knows it, what was expected and found, and a hint.
// A Diagnostic is the error on purpose (it is what the user sees); it is built rarely.
#[allow(clippy::result_large_err)]
pub fn from_str<T: DeserializeOwned>(text: &str, file: &str) -> Result<T, Diagnostic> {
    check_budget(text, file)?;
    serde_yaml::from_str(text).map_err(|e| serde_error(&e, text, file))
}

/// The diagnostic for serde_yaml's error `e` in `text` (the content of `file`).
fn serde_error(e: &serde_yaml::Error, text: &str, file: &str) -> Diagnostic {
    let mut d = to_diagnostic(e, file);
    // serde_yaml gives no position for "more than one document": point at the separator
    // that starts the second one.
    if d.line.is_none() && d.message.contains("more than one document") {
        d.line = second_document_line(text);
    }
    // A number of the wrong kind is named as written, not as serde reads it back (`1.6e1` was
    // shown as `16.0`, and `-0` as `0`, beside "expected a whole number from 0 to …").
    if let (Some(line), Some(col), Some(found)) = (d.line, d.column, d.found.clone())
        && d.expected.as_deref().is_some_and(|e| e.contains("number"))
        && found.trim_matches('`').parse::<f64>().is_ok()
        && let Some(v) = scalar_at(text, line, col)
        && v.parse::<f64>().is_ok()
        && format!("`{v}`") != found
    {
        let expected = d.expected.clone().unwrap_or_default();
        d.message = format!("expected {expected}, found `{v}`");
        d = d.found(format!("`{v}`"));
    }
    // A date that could not be read is named as written (`enrolled: 01/06/2026` said only
    // "input contains invalid characters", not what it had found there).
    if d.found.is_none()
        && is_date_error(&d.message)
        && let (Some(line), Some(col)) = (d.line, d.column)
        && let Some(v) = scalar_at(text, line, col)
    {
        d = d.found(format!("`{v}`"));
    }
    d
}

/// Reads a mapping document key by key, so that every key that cannot be read is reported,
/// not only the first one as [`from_str`] into a struct does. Each read is of the same text
/// by serde_yaml, so a problem has the line, column, key path and wording [`from_str`] gives
/// it. Use [`Fields::open`], then [`Fields::get`] for each key and [`Fields::unknown_keys`].
pub struct Fields<'a> {
    text: &'a str,
    file: &'a str,
    /// The problems found so far.
    pub problems: Vec<Diagnostic>,
    /// The keys whose value could not be read (a check that needs one is left out).
    pub failed: Vec<&'static str>,
}

impl<'a> Fields<'a> {
    /// `Err` with the one diagnostic when `text` cannot be read key by key: a syntax error,
    /// an input over its budget, several documents, or a document that is not a mapping.
    #[allow(clippy::result_large_err)]
    pub fn open(text: &'a str, file: &'a str) -> Result<Self, Diagnostic> {
        check_budget(text, file)?;
        match serde_yaml::from_str::<serde_yaml::Value>(text) {
            Ok(serde_yaml::Value::Mapping(_)) => Ok(Fields {
                text,
                file,
                problems: Vec::new(),
                failed: Vec::new(),
            }),
            Ok(other) => Err(Diagnostic::error(file, "the file is not a mapping of keys")
                .expected("`key: value` lines")
                .found(match other {
                    serde_yaml::Value::Null => "an empty document",
                    serde_yaml::Value::Sequence(_) => "a list",
                    _ => "a single value",
                })),
            Err(e) => Err(serde_error(&e, text, file)),
        }
    }

    /// The value of the top-level `key` read as `T`: `None` when the key is absent (a problem
    /// when `required`) or its value cannot be read (a problem).
    pub fn get<T: DeserializeOwned>(&mut self, key: &'static str, required: bool) -> Option<T> {
        use serde::de::DeserializeSeed;
        let seed = Pick::<T> {
            key,
            required,
            _t: std::marker::PhantomData,
        };
        match seed.deserialize(serde_yaml::Deserializer::from_str(self.text)) {
            Ok(v) => v,
            Err(e) => {
                self.problems.push(serde_error(&e, self.text, self.file));
                self.failed.push(key);
                None
            }
        }
    }

    /// Each top-level key that is not one of `known`, as the struct reading names it (line,
    /// column, the keys expected), at most `max` of them (a file with more is another file).
    pub fn unknown_keys(&mut self, known: &'static [&'static str], max: usize) {
        use serde::de::DeserializeSeed;
        for skip in 0..max {
            let seed = Unknown {
                known,
                skip,
                seen: std::cell::Cell::new(0),
            };
            match seed.deserialize(serde_yaml::Deserializer::from_str(self.text)) {
                Ok(()) => return,
                Err(e) => {
                    let d = serde_error(&e, self.text, self.file);
                    // A key that cannot be read as text fails every pass at the same place.
                    if self.problems.last().is_some_and(|p| {
                        (p.line, p.column, &p.message) == (d.line, d.column, &d.message)
                    }) {
                        return;
                    }
                    self.problems.push(d);
                }
            }
        }
    }
}

/// Reads one key of a mapping and skips the others.
struct Pick<T> {
    key: &'static str,
    required: bool,
    _t: std::marker::PhantomData<T>,
}

impl<'de, T: DeserializeOwned> serde::de::DeserializeSeed<'de> for Pick<T> {
    type Value = Option<T>;
    fn deserialize<D: serde::Deserializer<'de>>(self, d: D) -> Result<Option<T>, D::Error> {
        d.deserialize_map(self)
    }
}

impl<'de, T: DeserializeOwned> serde::de::Visitor<'de> for Pick<T> {
    type Value = Option<T>;
    fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("a mapping of keys")
    }
    fn visit_map<A: serde::de::MapAccess<'de>>(self, mut map: A) -> Result<Option<T>, A::Error> {
        let mut out = None;
        while let Some(k) = map.next_key::<Value>()? {
            if k.as_str() == Some(self.key) {
                out = Some(map.next_value::<T>()?);
            } else {
                map.next_value::<serde::de::IgnoredAny>()?;
            }
        }
        if out.is_none() && self.required {
            return Err(serde::de::Error::missing_field(self.key));
        }
        Ok(out)
    }
}

/// Fails at the key of a mapping that is the `skip`-th (from 0) not among `known`, with the
/// error a struct reading gives for it (so at the key's own line and column).
struct Unknown {
    known: &'static [&'static str],
    skip: usize,
    seen: std::cell::Cell<usize>,
}

impl<'de> serde::de::DeserializeSeed<'de> for Unknown {
    type Value = ();
    fn deserialize<D: serde::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        d.deserialize_map(self)
    }
}

impl<'de> serde::de::Visitor<'de> for Unknown {
    type Value = ();
    fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("a mapping of keys")
    }
    fn visit_map<A: serde::de::MapAccess<'de>>(self, mut map: A) -> Result<(), A::Error> {
        while map.next_key_seed(&self)?.is_some() {
            map.next_value::<serde::de::IgnoredAny>()?;
        }
        Ok(())
    }
}

impl<'de> serde::de::DeserializeSeed<'de> for &Unknown {
    type Value = ();
    fn deserialize<D: serde::Deserializer<'de>>(self, d: D) -> Result<(), D::Error> {
        // Read as a string inside serde_yaml, so an error raised here is placed at the key.
        d.deserialize_str(self)
    }
}

impl<'de> serde::de::Visitor<'de> for &Unknown {
    type Value = ();
    fn expecting(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("a key")
    }
    fn visit_str<E: serde::de::Error>(self, k: &str) -> Result<(), E> {
        if self.known.contains(&k) {
            return Ok(());
        }
        let n = self.seen.get();
        self.seen.set(n + 1);
        if n == self.skip {
            Err(E::unknown_field(k, self.known))
        } else {
            Ok(())
        }
    }
}

/// The plain or quoted scalar that starts at 1-based `line` and `column` of `text` (up to a
/// comment, the end of a flow item or the line's end), for naming a value that was refused.
fn scalar_at(text: &str, line: u64, column: u64) -> Option<String> {
    let l = text
        .lines()
        .nth(usize::try_from(line).ok()?.checked_sub(1)?)?;
    let start = usize::try_from(column).ok()?.checked_sub(1)?;
    let rest: String = l.chars().skip(start).collect();
    let v = if let Some(q @ ('"' | '\'')) = rest.chars().next() {
        rest[1..].split(q).next().unwrap_or_default().to_string()
    } else {
        let end = rest
            .find(" #")
            .into_iter()
            .chain(rest.find([',', '}', ']']))
            .min()
            .unwrap_or(rest.len());
        rest[..end].trim().to_string()
    };
    (!v.is_empty()).then_some(v)
}

/// The token (an alias `*name`, an anchor `&name`) at 1-based `line` and 0-based `col` of
/// `text`: up to white space, a flow indicator or the line's end; at most 64 characters.
fn token_at(text: &str, line: usize, col: usize) -> Option<String> {
    let l = text.lines().nth(line.checked_sub(1)?)?;
    let t: String = l
        .chars()
        .skip(col)
        .take_while(|c| !c.is_whitespace() && !matches!(c, ',' | '[' | ']' | '{' | '}'))
        .take(64)
        .collect();
    (!t.is_empty()).then_some(t)
}

/// A quoted value whose quote is never closed on its line (`name: "Ann Smith`, a typo or a
/// value cut short by an editor or a sync): the parser's words were "invalid indentation in
/// quoted scalar" (the next line is read as part of the value) or "while scanning a quoted
/// scalar, found unexpected end of stream", with the hint to check indentation, which does not
/// fit (tryout24: a participant left out of a monthly run for it). `None` for other errors, or
/// when no quote opens a value at `line`, `col` (1-based line, 0-based column) or the line
/// holds its closing quote.
fn unclosed_quote(
    text: &str,
    file: &str,
    info: &str,
    line: usize,
    col: usize,
) -> Option<Diagnostic> {
    if !(info.contains("invalid indentation in quoted scalar")
        || info.contains("found unexpected end of stream"))
    {
        return None;
    }
    let l = text.lines().nth(line.checked_sub(1)?)?;
    let rest: String = l.chars().skip(col).collect();
    let quote = rest.chars().next().filter(|c| matches!(c, '"' | '\''))?;
    let value = &rest[quote.len_utf8()..];
    // A closing quote on the line (not doubled in single quotes, not escaped in double ones)
    // means the problem is elsewhere.
    let closed = match quote {
        '"' => {
            let mut escaped = false;
            value.chars().any(|c| {
                let end = c == '"' && !escaped;
                escaped = c == '\\' && !escaped;
                end
            })
        }
        _ => value.replace("\'\'", "").contains('\''),
    };
    if closed {
        return None;
    }
    let shown: String = rest.trim_end().chars().take(80).collect();
    Some(
        Diagnostic::error(
            file,
            format!("a value opened with a quote ({quote}) is not closed on its line"),
        )
        .at(line as u64, Some(col as u64 + 1))
        .expected(format!(
            "the closing {quote} at the end of the value, on the same line"
        ))
        .found(format!("`{shown}`"))
        .hint(format!(
            "add the closing {quote} after the value (`{shown}{quote}`), or remove the opening \
             one; YAML reads the lines below as part of a quoted value until its quote closes"
        )),
    )
}

/// A quote inside a quoted value (`name: "Ann "the" Smith"`): the inner quote ends the value,
/// and the parser's words were "invalid trailing content after double-quoted scalar", with the
/// hint to check indentation, which does not fit (tryout24). The diagnostic points at the quote
/// that ended the value and gives the two ways to write it, built from the line when the value
/// ends on it. `None` for other errors, or when no such quote precedes `line`, `col` (1-based
/// line, 0-based column).
fn quote_inside_quoted(
    text: &str,
    file: &str,
    info: &str,
    line: usize,
    col: usize,
) -> Option<Diagnostic> {
    if !info.contains("trailing content after") || !info.contains("quoted scalar") {
        return None;
    }
    let l = text.lines().nth(line.checked_sub(1)?)?;
    let chars: Vec<char> = l.chars().collect();
    // The kind of quote is the one that ended the value, the last before the trailing text
    // (the parser says "double-quoted" after a single-quoted value too).
    let quote = *chars[..col.min(chars.len())]
        .iter()
        .rev()
        .find(|c| matches!(c, '"' | '\''))?;
    let escaped = |i: usize| quote == '"' && i > 0 && chars[i - 1] == '\\';
    // The quote that ended the value, and the one that opened it.
    let end = (0..col.min(chars.len()))
        .rev()
        .find(|&i| chars[i] == quote && !escaped(i))?;
    let open = (0..end).rev().find(|&i| chars[i] == quote && !escaped(i))?;
    let written: String = chars[open..]
        .iter()
        .collect::<String>()
        .trim_end()
        .to_string();
    let shown: String = written.chars().take(80).collect();
    let other = if quote == '"' { '\'' } else { '"' };
    // The value as meant: from the opening quote to the last one on the line, when the line
    // ends with it.
    let inner: Option<String> = written
        .strip_suffix(quote)
        .filter(|w| w.chars().count() > 1)
        .map(|w| w.chars().skip(1).collect());
    let how = match (quote, inner) {
        ('"', Some(v)) => format!(
            "put the value in single quotes (`'{}'`), or escape each quote inside it as \\\" \
             (`\"{}\"`)",
            v.replace('\'', "''"),
            v.replace("\\\"", "\"").replace('"', "\\\"")
        ),
        ('"', None) => {
            "put the value in single quotes, or escape each quote inside it as \\\"".to_string()
        }
        (_, Some(v)) => {
            let meant = v.replace("''", "'");
            format!(
                "write each ' inside it twice (`'{}'`), or put the value in double quotes \
                 (`\"{}\"`)",
                meant.replace('\'', "''"),
                meant.replace('\\', "\\\\").replace('"', "\\\"")
            )
        }
        (_, None) => "write each ' inside it twice, or put the value in double quotes".to_string(),
    };
    Some(
        Diagnostic::error(
            file,
            format!(
                "a quote ({quote}) inside the quoted value ends it early: the text after it \
                 cannot follow"
            ),
        )
        .at(line as u64, Some(end as u64 + 1))
        .expected(format!(
            "a quoted value whose quotes inside are escaped or of the other kind ({other})"
        ))
        .found(format!("`{shown}`"))
        .hint(how),
    )
}

/// Walks the event stream of `text` once, refusing it (with the line and column where a limit
/// was passed) when it has more than [`MAX_YAML_EVENTS`] events, more than [`MAX_YAML_ALIASES`]
/// aliases, lists or mappings nested deeper than [`MAX_YAML_DEPTH`], or more than
/// [`MAX_YAML_EXPANDED`] events once aliases are expanded. Work and memory are bounded by the
/// limits, whatever the text: the walk stops at the first limit passed.
///
/// A syntax error found here is reported here (with its line and column), so serde_yaml only
/// ever parses text that is within the budget.
#[allow(clippy::result_large_err)]
pub fn check_budget(text: &str, file: &str) -> Result<(), Diagnostic> {
    // Expanded size of each anchor's node, by anchor id (ids count up from 1 in the order the
    // anchors appear; 0 means "no anchor").
    let mut anchor_size: Vec<u64> = Vec::new();
    // Open lists and mappings: (anchor id, expanded count when it opened).
    let mut open: Vec<(usize, u64)> = Vec::new();
    // Where each open list or mapping starts (line, 0-based column), aligned with `open`.
    let mut open_at: Vec<(usize, usize)> = Vec::new();
    // For each open list or mapping (aligned with `open`): for a mapping, whether its next node
    // is a key, and the plain keys seen so far with their line. serde_yaml refuses a key given
    // twice but names the mapping's first line, not the key; here it is located.
    let mut maps: Vec<Option<(bool, std::collections::HashMap<String, usize>)>> = Vec::new();
    let (mut events, mut aliases, mut expanded) = (0u64, 0u64, 0u64);
    // Where the last event read ends (line, 0-based column).
    let mut last_end = (1usize, 0usize);
    let set_size = |sizes: &mut Vec<u64>, id: usize, size: u64| {
        if id > 0 && id <= MAX_YAML_EVENTS as usize {
            if sizes.len() <= id {
                sizes.resize(id + 1, 0);
            }
            sizes[id] = size;
        }
    };
    for item in Parser::new_from_str(text) {
        let (event, span) = match item {
            Ok(x) => x,
            Err(e) => {
                let m = e.marker();
                if e.info().contains("recursion limit") {
                    // The scanner's own bound on flow nesting (deeper than ours, reached when
                    // it reads ahead, so its marker lies far past the point): the same refusal
                    // as below, at the bracket that passes our limit.
                    // The open collections that are flow ones (`[`, `{`) are the innermost.
                    let flow = open_at
                        .iter()
                        .rev()
                        .take_while(|&&(line, col)| {
                            text.lines()
                                .nth(line.saturating_sub(1))
                                .and_then(|l| l.chars().nth(col))
                                .is_some_and(|c| matches!(c, '[' | '{'))
                        })
                        .count();
                    let (line, col) = deep_flow_at(text, last_end, open.len(), flow)
                        .unwrap_or((m.line(), m.col()));
                    return Err(too_deep(file).at(line as u64, Some(col as u64 + 1)));
                }
                if e.info().contains("unknown anchor") {
                    // `*name` with no `&name` before it: say which name, and what an alias is.
                    let name = token_at(text, m.line(), m.col()).unwrap_or_default();
                    return Err(Diagnostic::error(
                        file,
                        format!("the alias `{name}` refers to no anchor defined before it"),
                    )
                    .at(m.line() as u64, Some(m.col() as u64 + 1))
                    .expected(format!(
                        "an anchor `&{}` on a value earlier in the file, or a value written out",
                        name.trim_start_matches('*')
                    ))
                    .found(format!("`{name}`"))
                    .hint("a value starting with `*` is a YAML alias; quote it if it is text (\"*…\")"));
                }
                if let Some(d) = unclosed_quote(text, file, e.info(), m.line(), m.col())
                    .or_else(|| quote_inside_quoted(text, file, e.info(), m.line(), m.col()))
                {
                    return Err(d);
                }
                return Err(Diagnostic::error(file, format!("not valid YAML: {}", e.info()))
                    .at(m.line() as u64, Some(m.col() as u64 + 1))
                    .hint("check indentation (spaces, not tabs) and quote values containing `:` or `#`"));
            }
        };
        last_end = (span.end.line(), span.end.col());
        let here =
            |d: Diagnostic| d.at(span.start.line() as u64, Some(span.start.col() as u64 + 1));
        events += 1;
        expanded += 1;
        let is_node = matches!(
            event,
            Event::Scalar(..)
                | Event::SequenceStart(..)
                | Event::MappingStart(..)
                | Event::Alias(_)
        );
        if is_node && let Some(Some((expect_key, seen))) = maps.last_mut() {
            if *expect_key
                && let Event::Scalar(key, ..) = &event
                && key.as_ref() != "<<"
            {
                let line = span.start.line();
                if let Some(first) = seen.insert(key.to_string(), line) {
                    return Err(here(
                        Diagnostic::error(
                            file,
                            format!("the key `{key}` is given twice in one mapping (first on line {first})"),
                        )
                        .expected("each key once")
                        .found(format!("`{key}` again")),
                    )
                    .hint("keep only one of them: YAML does not say which one counts"));
                }
            }
            *expect_key = !*expect_key;
        }
        match event {
            Event::Scalar(_, _, anchor, _) => set_size(&mut anchor_size, anchor, 1),
            Event::SequenceStart(anchor, _) | Event::MappingStart(anchor, _) => {
                open.push((anchor, expanded - 1));
                open_at.push((span.start.line(), span.start.col()));
                maps.push(
                    matches!(event, Event::MappingStart(..))
                        .then(|| (true, std::collections::HashMap::new())),
                );
                if open.len() > MAX_YAML_DEPTH {
                    return Err(here(too_deep(file)));
                }
            }
            Event::SequenceEnd | Event::MappingEnd => {
                maps.pop();
                open_at.pop();
                if let Some((anchor, start)) = open.pop() {
                    set_size(&mut anchor_size, anchor, expanded - start);
                }
            }
            Event::Alias(id) => {
                // An alias inside the very list or mapping its anchor names would stand for a
                // value that contains itself: serde_yaml recursed until "recursion limit
                // exceeded", reported at the anchor as nesting too deep.
                if id > 0
                    && let Some(pos) = open.iter().position(|&(anchor, _)| anchor == id)
                {
                    let (line, col) = open_at[pos];
                    let name = token_at(text, span.start.line(), span.start.col())
                        .unwrap_or_else(|| "*".to_string());
                    return Err(here(
                        Diagnostic::error(
                            file,
                            format!(
                                "the alias `{name}` is inside the value its anchor `&{}` names \
                                 (line {line}, column {}): a value cannot contain itself",
                                name.trim_start_matches('*'),
                                col + 1
                            ),
                        )
                        .expected("an alias to a value that is complete before it")
                        .found(format!("`{name}` inside `&{}`", name.trim_start_matches('*'))),
                    )
                    .hint("write the value out, or move the alias after the end of the anchored value"));
                }
                aliases += 1;
                if aliases > MAX_YAML_ALIASES {
                    return Err(here(Diagnostic::error(
                        file,
                        format!(
                            "more than {MAX_YAML_ALIASES} aliases (`*name`); the file was not read further"
                        ),
                    ))
                    .expected(format!("at most {MAX_YAML_ALIASES} aliases"))
                    .hint("the file repeats YAML aliases (`*name`) too often; write the values out instead"));
                }
                // The alias stands for a copy of its anchor's node (itself one event here).
                let size = anchor_size.get(id).copied().unwrap_or(1).max(1);
                expanded = expanded.saturating_add(size - 1);
            }
            _ => {}
        }
        if events > MAX_YAML_EVENTS {
            return Err(here(Diagnostic::error(
                file,
                format!(
                    "more than {MAX_YAML_EVENTS} values, lists and mappings; the file was not read further"
                ),
            ))
            .expected(format!("at most {MAX_YAML_EVENTS} YAML values"))
            .hint("check it is the right file; a program or profile file holds a few hundred values"));
        }
        if expanded > MAX_YAML_EXPANDED {
            return Err(here(Diagnostic::error(
                file,
                format!(
                    "aliases (`*name`) expand the file to more than {MAX_YAML_EXPANDED} values; the file was not read further"
                ),
            ))
            .expected(format!("at most {MAX_YAML_EXPANDED} values once aliases are expanded"))
            .hint("the file expands YAML aliases (`*name`) too many times; write the values out instead"));
        }
    }
    Ok(())
}

/// The line and 0-based column (in characters) of the `[` or `{` after `from` that opens the
/// list or mapping one level past [`MAX_YAML_DEPTH`], given `depth` levels already open there,
/// the innermost `flow` of them flow lists or mappings (`[`, `{`). Only brackets that open or
/// close a collection count: scalars are skipped (quoted text with its escapes, `\\"` and `''`;
/// plain text such as `don't` or `a"b`, which holds no flow indicator inside a flow collection
/// and anything in a block one, `note: see [1]`), and so are comments, anchors, tags and
/// aliases. `None` when no bracket does (the caller then keeps the parser's own position).
///
/// The parser's scanner reads a flow collection ahead to its end (or its own limit) before the
/// parser gets the first event of it, so the text after `from` may hold any scalars: counting
/// every bracket and taking `'` in `don't` for a quote placed the error at the wrong bracket, or
/// (no bracket found) at the scanner's position, hundreds of columns past the point.
fn deep_flow_at(
    text: &str,
    from: (usize, usize),
    depth: usize,
    flow: usize,
) -> Option<(usize, usize)> {
    // What the scan is in: a quoted scalar (its quote), a plain scalar, an anchor, tag or
    // alias (`&a`, `!!str`, `*a`), just after a quoted scalar or a closed collection (where a
    // `:` ends a key even with no space after it, `{"a":1}`), or between tokens.
    #[derive(Clone, Copy, PartialEq)]
    enum In {
        Quoted(char),
        Plain,
        Property,
        After,
        Between,
    }
    let is_flow_indicator = |c: char| matches!(c, ',' | '[' | ']' | '{' | '}');
    let (mut depth, mut flow) = (depth, flow);
    let mut state = In::Between;
    for (i, line) in text.lines().enumerate().skip(from.0.saturating_sub(1)) {
        let chars: Vec<char> = line.chars().collect();
        // A new line in block context starts a new node (a plain scalar going on over lines
        // is read the same way); in flow context a plain scalar may go on.
        if flow == 0 && !matches!(state, In::Quoted(_)) {
            state = In::Between;
        }
        let mut col = if i + 1 == from.0 { from.1 } else { 0 };
        while col < chars.len() {
            let c = chars[col];
            let prev = col.checked_sub(1).map_or(' ', |p| chars[p]);
            let next = chars.get(col + 1).copied().unwrap_or(' ');
            // `:` ends a key (and `-`, `?` start a node) when white space follows; in flow
            // context a flow indicator may follow too.
            let separated = next.is_whitespace() || (flow > 0 && is_flow_indicator(next));
            match (state, c) {
                // An escape takes the next character with it (`"a\\"` ends at its last quote).
                (In::Quoted('"'), '\\') => col += 1,
                (In::Quoted('"'), '"') => state = In::After,
                // `''` is a quote inside single quotes.
                (In::Quoted('\''), '\'') if next == '\'' => col += 1,
                (In::Quoted('\''), '\'') => state = In::After,
                (In::Quoted(_), _) => {}
                // A comment, to the end of the line.
                (_, '#') if prev.is_whitespace() => {
                    state = match state {
                        In::Plain => In::After,
                        In::Property => In::Between,
                        other => other,
                    };
                    break;
                }
                (In::Property, _) if c.is_whitespace() => state = In::Between,
                (_, _) if c.is_whitespace() => {}
                // In block context a plain scalar holds any bracket or quote; `: ` ends a key.
                (In::Plain, ':') if flow == 0 && separated => state = In::Between,
                (In::Plain, _) if flow == 0 => {}
                (In::Property, _) if !(flow > 0 && is_flow_indicator(c)) => {}
                (_, '[' | '{') => {
                    depth += 1;
                    flow += 1;
                    if depth > MAX_YAML_DEPTH {
                        return Some((i + 1, col));
                    }
                    state = In::Between;
                }
                (_, ']' | '}') if flow > 0 => {
                    depth = depth.saturating_sub(1);
                    flow -= 1;
                    state = In::After;
                }
                (_, ',') if flow > 0 => state = In::Between,
                (In::After, ':') => state = In::Between,
                (_, ':') if separated => state = In::Between,
                (In::Between, '-' | '?') if separated => {}
                (In::Between, '"' | '\'') => state = In::Quoted(c),
                (In::Between, '&' | '!' | '*') => state = In::Property,
                (In::Between | In::After, _) => state = In::Plain,
                _ => {}
            }
            col += 1;
        }
    }
    None
}

fn too_deep(file: &str) -> Diagnostic {
    Diagnostic::error(
        file,
        format!(
            "lists and mappings are nested more than {MAX_YAML_DEPTH} levels deep; the file was not read further"
        ),
    )
    .expected(format!("at most {MAX_YAML_DEPTH} levels of nesting"))
    .hint("the file nests lists or mappings too deeply; flatten it")
}

/// 1-based line of the `---` (or `...`) marker that ends the first document, if any.
fn second_document_line(text: &str) -> Option<u64> {
    let mut seen_content = false;
    for (i, line) in text.lines().enumerate() {
        let t = line.trim_end();
        if t == "---" || t.starts_with("--- ") || t == "..." {
            if seen_content {
                return Some(i as u64 + 1);
            }
        } else if !t.trim_start().is_empty() && !t.trim_start().starts_with('#') {
            seen_content = true;
        }
    }
    None
}

/// Parses `text` into an untyped YAML value (for module settings).
#[allow(clippy::result_large_err)]
pub fn value_from_str(text: &str, file: &str) -> Result<serde_yaml::Value, Diagnostic> {
    from_str(text, file)
}

/// The YAML value type, re-exported so callers need not name the crate.
pub type Value = serde_yaml::Value;

/// A value of the wrong kind, in the words of the file's writer: serde names Rust's types and
/// its own terms (`expected f64`, `expected u32`, `found: integer `…` as u128`, `expected a
/// YAML tag starting with '!'` for `sex: [female]`), which told a program's staff nothing (and
/// the last, nothing true). The message, `expected` and `found` say it plainly; anything not
/// recognised is kept as serde wrote it.
fn in_plain_words(mut d: Diagnostic, found: &str, exp: &str) -> Diagnostic {
    let expected = match exp {
        "f32" | "f64" => "a number",
        "u8" => "a whole number from 0 to 255",
        "u16" => "a whole number from 0 to 65,535",
        "u32" => "a whole number from 0 to 4,294,967,295",
        "u64" | "usize" => "a whole number of 0 or more",
        "i8" | "i16" | "i32" | "i64" => "a whole number",
        "a boolean" => "`true` or `false`",
        "a string" => "text",
        "a map" => "keys and values (`key: value`)",
        "a sequence" => "a list (`[a, b]`, or one `- item` per line)",
        // What serde_yaml expects of an enum written as a list or a mapping.
        "a YAML tag starting with '!'" => "one value, not a list or keys and values",
        other => other,
    };
    let quoted = |v: &str| format!("`{v}`");
    let shown = if let Some(t) = found
        .strip_prefix("string \"")
        .and_then(|t| t.strip_suffix('"'))
    {
        quoted(t)
    } else if let Some(n) = ["integer `", "floating point `", "boolean `"]
        .iter()
        .find_map(|p| found.strip_prefix(p))
        .and_then(|n| n.split('`').next())
    {
        // `integer `99…9` as u128`: the number as written, without serde's type.
        quoted(n)
    } else {
        match found {
            "sequence" => "a list".to_string(),
            "map" => "keys and values".to_string(),
            "unit value" => "nothing (an empty value)".to_string(),
            other => other.to_string(),
        }
    };
    if expected != exp || shown != found {
        d.message = format!("expected {expected}, found {shown}");
    }
    d.found(shown).expected(expected.to_string())
}

/// The hint for a number where a whole number is expected (serde's `found`, the `expected` in
/// plain words): `sessions_offered: 16.0`, `-3` or a number past the range were told to "quote
/// text that YAML would read as a number", which is no way to write a count.
fn whole_number_hint(found: &str, expected: Option<&str>) -> Option<&'static str> {
    if !expected.is_some_and(|e| e.starts_with("a whole number")) {
        return None;
    }
    if found.starts_with("floating point ") {
        Some("write a whole number, without a decimal point or exponent (e.g. `16`)")
    } else if found.starts_with("integer ") {
        Some("write a whole number within the range expected")
    } else {
        None
    }
}

fn to_diagnostic(e: &serde_yaml::Error, file: &str) -> Diagnostic {
    let full = e.to_string();
    // serde_yaml appends " at line L column C" (and for libyaml errors a second context
    // "…, while parsing … at line …"); the location goes into the diagnostic's fields instead.
    let text = strip_locations(&full);
    let (path, msg) = split_path(&text);
    let mut d = Diagnostic::error(file, describe(&msg));
    if let Some(loc) = e.location() {
        d = d.at(loc.line() as u64, Some(loc.column() as u64));
    }
    if let Some(p) = path {
        d = d.field(p);
    }
    if let Some(rest) = msg.strip_prefix("unknown field `") {
        if let Some((key, tail)) = rest.split_once('`') {
            // The list of allowed keys goes under "expected", not into the headline too.
            d.message = format!("unknown key `{key}`");
            d = d.found(format!("`{key}`"));
            if let Some(exp) = tail.strip_prefix(", expected ") {
                d = d.expected(exp.to_string());
            } else if tail.contains("there are no fields") {
                d = d.expected("no keys here");
            }
            // The README's tables name nested keys with dots (`program.id`); written so, the
            // key is one name that is not ours.
            let parent = key.split('.').next().unwrap_or_default();
            if key.contains('.') && tail.contains(&format!("`{parent}`")) {
                let child = &key[parent.len() + 1..];
                d = d.hint(format!(
                    "`{key}` is `{child}:` indented under `{parent}:` (the tables write nested keys with dots): `{parent}:` on a line of its own, then `  {child}: …` below it"
                ));
            } else {
                d = d.hint("check the spelling (keys are lowercase, with `_` between words) and the indentation");
            }
        }
    } else if let Some(rest) = msg.strip_prefix("unknown variant `") {
        if let Some((val, tail)) = rest.split_once('`') {
            d = d.found(format!("`{val}`"));
            if let Some(exp) = tail.strip_prefix(", expected ") {
                d = d.expected(exp.to_string());
            }
            d = d.hint(if tail.contains("`unrecorded`") {
                // profile.yaml's `sex:` (a record that says `nonbinary`, `x`, `diverse`, …).
                SEX_HINT
            } else {
                "use one of the listed values, spelled exactly"
            });
        }
    } else if let Some(rest) = msg.strip_prefix("missing field `") {
        let key = rest.split('`').next().unwrap_or_default();
        d = d.expected(format!("the key `{key}:`"));
        d = if key == "sex" {
            d.hint(SEX_HINT)
        } else {
            d.hint(format!("add `{key}:` with a value"))
        };
    } else if let Some(rest) = msg.strip_prefix("invalid type: ") {
        match rest.split_once(", expected ") {
            // "expected struct ModuleDef" names a type of ours, not what to write.
            Some((found, exp)) if exp.starts_with("struct ") => {
                let in_modules = d
                    .field
                    .as_deref()
                    .is_some_and(|f| f.starts_with("modules["));
                d.message = format!("{found} where keys and values belong");
                d = d
                    .found(found.to_string())
                    .expected("a mapping of keys and values")
                    .hint(if in_modules {
                        "write each module as `- id: trend` (a mapping with `id:`), one per line, not as its id alone"
                    } else {
                        "write the keys this place takes on lines of their own, indented below it (`key: value`)"
                    });
            }
            found_exp => {
                let mut hint = "quote text that YAML would read as a number or date, and check the value's kind";
                if let Some((found, exp)) = found_exp {
                    d = in_plain_words(d, found, exp);
                    // A number expected (in plain words, as `in_plain_words` put it), text found.
                    if found.starts_with("string ")
                        && d.expected.as_deref().is_some_and(|e| e.contains("number"))
                    {
                        hint = "write the number alone, without a unit or words (e.g. `45`)";
                    } else if let Some(h) = whole_number_hint(found, d.expected.as_deref()) {
                        hint = h;
                    }
                }
                d = d.hint(hint);
            }
        }
    } else if let Some(rest) = msg.strip_prefix("invalid value: ") {
        if let Some((found, exp)) = rest.split_once(", expected ") {
            d = in_plain_words(d, found, exp);
            if let Some(h) = whole_number_hint(found, d.expected.as_deref()) {
                d = d.hint(h);
            }
        }
    } else if is_date_error(&msg) {
        d = d
            .expected("a date written YYYY-MM-DD")
            .hint("write dates as year-month-day, e.g. 2026-04-01, and check the day exists");
    } else if msg.contains("repetition limit exceeded") {
        d = d.hint(
            "the file expands YAML aliases (`*name`) too many times; write the values out instead",
        );
    } else if msg.contains("recursion limit exceeded") {
        d = d.hint("the file nests lists or mappings too deeply; flatten it");
    } else if msg.contains("more than one document") {
        d = d.hint("remove the `---` separators: a file holds one document");
    } else if msg.contains("did not find expected")
        || msg.contains("mapping values are not allowed")
        || msg.contains("found character that cannot start")
    {
        d = d.hint("check indentation (spaces, not tabs) and quote values containing `:` or `#`");
    }
    d
}

/// Messages chrono gives for dates it cannot parse.
fn is_date_error(msg: &str) -> bool {
    [
        "input contains invalid characters",
        "premature end of input",
        "input is out of range",
        "trailing input",
        "input is not enough for unique date",
        "no possible date and time matching input",
    ]
    .iter()
    .any(|m| msg.contains(m))
}

fn describe(msg: &str) -> String {
    if is_date_error(msg) {
        format!("not a valid date ({msg})")
    } else {
        msg.to_string()
    }
}

/// Removes every " at line L column C" from a serde_yaml message.
fn strip_locations(s: &str) -> String {
    let mut out = String::new();
    let mut rest = s;
    while let Some(i) = rest.find(" at line ") {
        out.push_str(&rest[..i]);
        let after = &rest[i + " at line ".len()..];
        // Skip "L column C".
        let skip = after
            .char_indices()
            .find(|&(_, c)| !(c.is_ascii_digit() || c == ' ' || "column".contains(c)))
            .map_or(after.len(), |(j, _)| j);
        rest = &after[skip..];
    }
    out.push_str(rest);
    out.trim().to_string()
}

/// Splits serde_yaml's "key.path: message" into the path and the message.
fn split_path(s: &str) -> (Option<String>, String) {
    if let Some((p, m)) = s.split_once(": ") {
        let plain = !p.is_empty()
            && p.chars()
                .all(|c| c.is_ascii_alphanumeric() || "._-[]".contains(c))
            && !p.starts_with("invalid")
            && !p.starts_with("unknown")
            && !p.starts_with("missing");
        if plain {
            return (Some(p.to_string()), m.to_string());
        }
    }
    (None, s.to_string())
}

/// The hint for profile.yaml's `sex:` when it is missing or holds another value: the
/// energy equations know two forms, and `unrecorded` takes both with the added uncertainty.
const SEX_HINT: &str = "write `sex: female` or `sex: male` as the record gives it, or `sex: unrecorded` when it gives neither (the energy equations then take the mean of both forms, with wider ranges)";

#[cfg(test)]
mod tests {
    use super::*;
    use serde::Deserialize;

    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Inner {
        start: chrono::NaiveDate,
        count: u32,
    }

    #[derive(Debug, Deserialize)]
    #[serde(deny_unknown_fields)]
    #[allow(dead_code)]
    struct Outer {
        name: String,
        inner: Inner,
    }

    /// A value of the wrong kind is said in the file writer's words, not in Rust's types.
    #[test]
    fn a_value_of_the_wrong_kind_is_said_in_plain_words() {
        #[derive(Debug, Deserialize)]
        #[serde(rename_all = "lowercase")]
        #[allow(dead_code)]
        enum Sex {
            Female,
            Male,
        }
        #[derive(Debug, Deserialize)]
        #[allow(dead_code)]
        struct Profile {
            age: Option<f64>,
            sex: Option<Sex>,
            count: Option<u32>,
        }
        let err = |text: &str| from_str::<Profile>(text, "profile.yaml").unwrap_err();
        let d = err("age: 45 years\n");
        assert_eq!(d.message, "expected a number, found `45 years`");
        assert_eq!(d.expected.as_deref(), Some("a number"));
        assert_eq!(d.found.as_deref(), Some("`45 years`"));
        assert_eq!(
            d.hint.as_deref(),
            Some("write the number alone, without a unit or words (e.g. `45`)")
        );
        // serde_yaml's words for an enum written as a list were "a YAML tag starting with '!'".
        let d = err("sex:\n  - female\n");
        assert_eq!(
            d.message,
            "expected one value, not a list or keys and values, found a list"
        );
        let d = err("count: 99999999999999999999999\n");
        assert_eq!(
            d.message,
            "expected a whole number from 0 to 4,294,967,295, found `99999999999999999999999`"
        );
        let d = err("count: 4294967296\n");
        assert_eq!(
            (d.expected.as_deref(), d.found.as_deref()),
            (
                Some("a whole number from 0 to 4,294,967,295"),
                Some("`4294967296`")
            )
        );
        assert_eq!((d.line, d.column), (Some(1), Some(8)), "{d}");
    }

    /// A count written `16.0`, `-3`, `1.6e1` or `-0` was told to "quote text that YAML would
    /// read as a number or date" (quoted, it is text, refused too), and the last two were shown
    /// as serde reads them back (`16.0`, `0`: "expected a whole number from 0 to …, found `0`").
    /// Each is named as written, with a hint that says how to write a count.
    #[test]
    fn a_number_where_a_count_belongs_is_named_as_written_with_a_hint_that_fits() {
        #[derive(Debug, Deserialize)]
        #[allow(dead_code)]
        struct Targets {
            count: Option<u32>,
        }
        let err = |text: &str| from_str::<Targets>(text, "program.yaml").unwrap_err();
        let decimal = "write a whole number, without a decimal point or exponent (e.g. `16`)";
        let range = "write a whole number within the range expected";
        for (written, hint) in [
            ("16.0", decimal),
            ("16.5", decimal),
            ("1.6e1", decimal),
            ("-0", range),
            ("-3", range),
            ("99999999999999999999", range),
        ] {
            let d = err(&format!("count: {written}\n"));
            assert_eq!(
                d.message,
                format!("expected a whole number from 0 to 4,294,967,295, found `{written}`"),
                "{d}"
            );
            assert_eq!(d.found, Some(format!("`{written}`")));
            assert_eq!(d.hint.as_deref(), Some(hint), "{written}: {d}");
            assert_eq!((d.line, d.column), (Some(1), Some(8)), "{d}");
        }
    }

    /// A profile whose name lost its closing quote (`name: "Ann Smith`) was refused "not valid
    /// YAML: invalid indentation in quoted scalar" with the hint to check indentation; at the
    /// end of the file, "while scanning a quoted scalar, found unexpected end of stream". Both
    /// now say the quote is not closed and how to close it; a quote closed on its line keeps
    /// the parser's words.
    #[test]
    fn a_quote_not_closed_on_its_line_is_named_with_how_to_close_it() {
        let err = |text: &str| value_from_str(text, "profile.yaml").unwrap_err();
        let d = err("id: SG-006\nname: \"Ann Smith\nsex: female\n");
        assert_eq!(
            d.message,
            "a value opened with a quote (\") is not closed on its line"
        );
        assert_eq!((d.line, d.column), (Some(2), Some(7)), "{d}");
        assert_eq!(d.found.as_deref(), Some("`\"Ann Smith`"));
        assert_eq!(
            d.hint.as_deref(),
            Some(
                "add the closing \" after the value (`\"Ann Smith\"`), or remove the opening one; \
                 YAML reads the lines below as part of a quoted value until its quote closes"
            )
        );
        let d = err("id: SG-006\nsex: female\nname: 'Ann Smith\n");
        assert_eq!((d.line, d.column), (Some(3), Some(7)), "{d}");
        assert!(d.message.contains("quote (') is not closed"), "{d}");
        // Closed on its line: another problem (a quote inside the value), not this one.
        let d = err("name: \"Ann \"the\" Smith\"\n");
        assert!(!d.message.contains("not closed"), "{d}");
    }

    /// A quote inside a double-quoted value (`name: "Ann "the" Smith"`) read "not valid YAML:
    /// invalid trailing content after double-quoted scalar" with the hint to check indentation
    /// (tryout24). It now says that the inner quote ends the value early, at the line and column
    /// of that quote, with the two ways to write it; the same for single quotes.
    #[test]
    fn a_quote_inside_a_quoted_value_is_named_with_how_to_write_it() {
        let err = |text: &str| value_from_str(text, "profile.yaml").unwrap_err();
        let d = err("id: SG-006\nname: \"Ann \"the\" Smith\"\nsex: female\n");
        assert_eq!(
            d.message,
            "a quote (\") inside the quoted value ends it early: the text after it cannot follow"
        );
        assert_eq!(d.file, "profile.yaml");
        // The quote after `Ann `: line 2, column 12.
        assert_eq!((d.line, d.column), (Some(2), Some(12)), "{d}");
        assert_eq!(d.found.as_deref(), Some("`\"Ann \"the\" Smith\"`"));
        assert_eq!(
            d.expected.as_deref(),
            Some("a quoted value whose quotes inside are escaped or of the other kind (')")
        );
        let hint = d.hint.as_deref().unwrap();
        assert_eq!(
            hint,
            "put the value in single quotes \
             (`'Ann \"the\" Smith'`), or escape each quote inside it as \\\" \
             (`\"Ann \\\"the\\\" Smith\"`)"
        );
        assert!(!hint.contains("indentation"), "{hint}");
        // Either way it suggests reads back as the name written.
        for fixed in [
            "name: 'Ann \"the\" Smith'\n",
            "name: \"Ann \\\"the\\\" Smith\"\n",
        ] {
            let v = value_from_str(fixed, "profile.yaml").unwrap();
            assert_eq!(v["name"].as_str(), Some("Ann \"the\" Smith"), "{fixed}");
        }
        // Single quotes: a quote inside is written twice.
        let d = err("name: 'Ann O'Brien'\n");
        assert_eq!((d.line, d.column), (Some(1), Some(13)), "{d}");
        assert!(d.message.contains("quote (')"), "{d}");
        assert_eq!(
            d.hint.as_deref(),
            Some(
                "write each ' inside it twice \
                 (`'Ann O''Brien'`), or put the value in double quotes (`\"Ann O'Brien\"`)"
            )
        );
        let v = value_from_str("name: 'Ann O''Brien'\n", "profile.yaml").unwrap();
        assert_eq!(v["name"].as_str(), Some("Ann O'Brien"));
    }

    #[test]
    fn unknown_key_is_named_with_its_line() {
        let text = "name: a\ninner:\n  start: 2026-04-01\n  count: 3\n  colour: red\n";
        let d = from_str::<Outer>(text, "program.yaml").unwrap_err();
        assert_eq!(d.line, Some(5), "{d}");
        assert_eq!(d.column, Some(3), "{d}");
        assert_eq!(d.found.as_deref(), Some("`colour`"));
        assert!(d.expected.as_deref().unwrap().contains("`start`"), "{d}");
        assert_eq!(d.field.as_deref(), Some("inner"));
        assert!(d.message.contains("unknown key `colour`"), "{d}");
        assert!(!d.message.contains("at line"), "{d}");
        assert!(d.hint.is_some());
    }

    #[test]
    fn a_key_given_twice_is_located_at_its_second_occurrence() {
        // serde_yaml alone names line 1, column 1 (the mapping's start) and nothing else.
        let text = "name: a\ninner:\n  start: 2026-04-01\n  count: 3\n  count: 4\n";
        let d = from_str::<Outer>(text, "program.yaml").unwrap_err();
        assert_eq!((d.line, d.column), (Some(5), Some(3)), "{d}");
        assert!(d.message.contains("`count` is given twice"), "{d}");
        assert!(d.message.contains("first on line 4"), "{d}");
        assert_eq!(d.expected.as_deref(), Some("each key once"));
        assert_eq!(d.found.as_deref(), Some("`count` again"));
        // In a flow mapping, at its column; the same key in two mappings, or a value equal
        // to a key, is no duplicate.
        let d = check_budget("a: {x: 1, y: 2, x: 3}\n", "f.yaml").unwrap_err();
        assert_eq!((d.line, d.column), (Some(1), Some(17)), "{d}");
        assert!(check_budget("a: {x: 1}\nb: {x: a}\nc: [x, x]\n", "f.yaml").is_ok());
    }

    /// An alias inside the value its own anchor names (`groups: &g { site: *g }`) stood for a
    /// value containing itself: serde_yaml recursed to its limit, and the message was
    /// "recursion limit exceeded" with the hint to flatten deep nesting. An alias naming no
    /// anchor said only "while parsing node, found unknown anchor".
    #[test]
    fn an_alias_to_itself_or_to_nothing_is_named_with_both_places() {
        let text = "id: a\ngroups: &g { site: *g }\n";
        let d = from_str::<serde_yaml::Value>(text, "profile.yaml").unwrap_err();
        assert_eq!((d.line, d.column), (Some(2), Some(20)), "{d}");
        assert_eq!(
            d.message,
            "the alias `*g` is inside the value its anchor `&g` names (line 2, column 9): \
             a value cannot contain itself",
            "{d}"
        );
        assert_eq!(d.found.as_deref(), Some("`*g` inside `&g`"));
        assert!(!d.hint.as_deref().unwrap().contains("nest"), "{d}");
        // In a block list, deeper down, and through Fields (profile.yaml's reading).
        let text = "flags: &f\n  - a\n  - [b, *f]\n";
        let d = Fields::open(text, "profile.yaml").err().unwrap();
        assert_eq!((d.line, d.column), (Some(3), Some(9)), "{d}");
        assert!(
            d.message.contains("`*f`") && d.message.contains("(line 1, column 8)"),
            "{d}"
        );
        // An alias after its anchored value is complete is fine.
        assert!(check_budget("a: &x [1, 2]\nb: [*x, *x]\n", "f.yaml").is_ok());
        // An alias to no anchor.
        let d = check_budget("flags: [a, *nope]\n", "f.yaml").unwrap_err();
        assert_eq!((d.line, d.column), (Some(1), Some(12)), "{d}");
        assert_eq!(
            d.message,
            "the alias `*nope` refers to no anchor defined before it"
        );
        assert_eq!(d.found.as_deref(), Some("`*nope`"));
    }

    #[test]
    fn bad_date_gives_line_and_hint() {
        let text = "name: a\ninner:\n  start: 2026-02-30\n  count: 3\n";
        let d = from_str::<Outer>(text, "program.yaml").unwrap_err();
        assert_eq!(d.line, Some(3), "{d}");
        assert_eq!(d.field.as_deref(), Some("inner.start"), "{d}");
        assert!(d.message.contains("not a valid date"), "{d}");
        assert!(d.hint.as_deref().unwrap().contains("2026-04-01"));
        // What was found is named, as written (it was left out).
        assert_eq!(d.found.as_deref(), Some("`2026-02-30`"), "{d}");
        // A date in another order, with a comment after it, and a quoted one.
        let text = "name: a\ninner:\n  start: 01/06/2026   # enrolment day\n  count: 3\n";
        let d = from_str::<Outer>(text, "profile.yaml").unwrap_err();
        assert_eq!((d.line, d.column), (Some(3), Some(10)), "{d}");
        assert_eq!(d.found.as_deref(), Some("`01/06/2026`"), "{d}");
        let text = "name: a\ninner: { start: \"1 June 2026\", count: 3 }\n";
        let d = from_str::<Outer>(text, "profile.yaml").unwrap_err();
        assert_eq!(d.found.as_deref(), Some("`1 June 2026`"), "{d}");
    }

    #[test]
    fn wrong_type_says_expected_and_found() {
        let text = "name: a\ninner:\n  start: 2026-02-03\n  count: many\n";
        let d = from_str::<Outer>(text, "x.yaml").unwrap_err();
        assert_eq!(d.line, Some(4), "{d}");
        assert_eq!(d.found.as_deref(), Some("`many`"), "{d}");
        assert_eq!(
            d.expected.as_deref(),
            Some("a whole number from 0 to 4,294,967,295"),
            "{d}"
        );
    }

    #[test]
    fn missing_key_is_named() {
        let d = from_str::<Outer>("name: a\n", "x.yaml").unwrap_err();
        assert!(d.message.contains("missing field `inner`"), "{d}");
        assert_eq!(d.hint.as_deref(), Some("add `inner:` with a value"));
    }

    #[test]
    fn a_second_document_is_located_at_its_separator() {
        #[derive(Debug, serde::Deserialize)]
        struct P {
            #[allow(dead_code)]
            a: u32,
        }
        let d = from_str::<P>("a: 1\n---\na: 2\n", "x.yaml").unwrap_err();
        assert!(d.message.contains("more than one document"), "{d}");
        assert_eq!(d.line, Some(2));
    }

    #[test]
    fn syntax_error_has_location() {
        let d = from_str::<Outer>("name: a\n  inner: [1, 2\n", "x.yaml").unwrap_err();
        assert!(d.line.is_some(), "{d}");
    }

    #[test]
    fn alias_bomb_is_refused() {
        // "Billion laughs": nine levels of nine-fold aliases would expand to 9^9 leaves.
        let mut text = String::from(
            "a: &a [\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\",\"lol\"]\n",
        );
        let names = ["a", "b", "c", "d", "e", "f", "g", "h", "i"];
        for w in names.windows(2) {
            let (prev, next) = (w[0], w[1]);
            let refs = vec![format!("*{prev}"); 9].join(",");
            text.push_str(&format!("{next}: &{next} [{refs}]\n"));
        }
        let d = from_str::<Value>(&text, "bomb.yaml").unwrap_err();
        assert!(
            d.message.contains("expand the file to more than 200000"),
            "{d}"
        );
        assert!(d.hint.as_deref().unwrap().contains("alias"));
        // Refused where the budget ran out (line 6 alone would expand to 664,000 values).
        assert_eq!(d.line, Some(6), "{d}");
    }

    #[test]
    fn one_large_anchor_with_many_aliases_is_refused() {
        // serde_yaml alone expanded this kind of file to gigabytes: its repetition limit
        // grows with the file.
        let big: Vec<String> = (0..2000).map(|i| format!("v{i}")).collect();
        let mut text = format!("a: &a [{}]\nb: [", big.join(","));
        text.push_str(&vec!["*a"; 200].join(","));
        text.push_str("]\n");
        let d = from_str::<Value>(&text, "p.yaml").unwrap_err();
        assert!(d.message.contains("expand the file"), "{d}");
        assert_eq!(d.line, Some(2));
        // Many small aliases: over the alias count.
        let text = format!("a: &a 1\nb: [{}]\n", vec!["*a"; 1001].join(","));
        let d = from_str::<Value>(&text, "p.yaml").unwrap_err();
        assert!(d.message.contains("more than 1000 aliases"), "{d}");
        // Within the budget aliases still work.
        let v: Value = from_str("a: &a [1, 2]\nb: *a\n", "p.yaml").unwrap();
        assert_eq!(v["b"], v["a"]);
    }

    #[test]
    fn deep_nesting_is_refused() {
        let text = format!("{}{}", "[".repeat(100_000), "]".repeat(100_000));
        let d = from_str::<Value>(&text, "deep.yaml").unwrap_err();
        assert!(d.message.contains("nested more than 32 levels"), "{d}");
        assert_eq!(d.line, Some(1));
        // The 33rd bracket: the scanner stops far past it (reading ahead), at column 257.
        assert_eq!(d.column, Some(33), "{d}");
        assert!(d.hint.as_deref().unwrap().contains("nests"));
        // Below a mapping and a list (two levels), after a quoted bracket and a closed list: the 31st
        // bracket of the deep list (column 40), whether the parser or its scanner stops.
        for n in [40, 300] {
            let text = format!(
                "a: \"[[\"\nb: [[1], {}{}\n",
                "[".repeat(n),
                "]".repeat(n + 1)
            );
            let d = from_str::<Value>(&text, "deep.yaml").unwrap_err();
            assert!(d.message.contains("nested more than 32 levels"), "{d}");
            assert_eq!((d.line, d.column), (Some(2), Some(40)), "{n}: {d}");
        }
        let ok = format!("a: {}{}", "[".repeat(31), "]".repeat(31));
        assert!(from_str::<Value>(&ok, "deep.yaml").is_ok());
    }

    /// Scalars between the start of a deep flow collection and the bracket past the limit are
    /// read ahead by the scanner before the parser sees them, and the bracket was found by
    /// counting every `[` and `{` after the last event: `don't` or `a"b` started a quoted
    /// string, `"a\\"` did not end one, so the error was placed at the scanner's position
    /// (column 267 where the bracket is at column 43), or at a bracket in the text. Each
    /// scalar below is placed inside the nesting, alone and after each other one; the error is
    /// at the bracket that opens level 33, counted by construction.
    #[test]
    fn deep_flow_nesting_is_located_past_any_scalar() {
        let items = [
            r#""a\\""#,
            r#""\"[[""#,
            "'it''s [['",
            "don't",
            r#"a"b"#,
            "a#b",
            r#""x]]]""#,
            "'[[['",
            r##""#[[""##,
            "&an 1",
            r#"!!str "q[[""#,
            r#"{"k":"v"}"#,
            r#"{k: [1, "]"]}"#,
            "[]",
            "\"multi\n  line [[\\\\\"",
            "a: b",
            "a:b",
            "1 # a comment [[[ {{\n",
            "? k : v",
            "-1",
        ];
        let mut cases: Vec<Vec<&str>> = items.iter().map(|i| vec![*i]).collect();
        for a in items {
            for b in items {
                cases.push(vec![a, b]);
            }
        }
        cases.push(items.to_vec());
        for case in cases {
            // Level 1 is the mapping, 2 to 11 the brackets before the scalars.
            let head = format!("note: \"[[[\"\nx: {} {}, ", "[".repeat(10), case.join(", "));
            let text = format!("{head}{}{}\n", "[".repeat(300), "]".repeat(310));
            let d = from_str::<Value>(&text, "deep.yaml").unwrap_err();
            assert!(
                d.message.contains("nested more than 32 levels"),
                "{case:?}: {d}"
            );
            // The 22nd bracket of the deep run opens level 33.
            let at = head.chars().count() + 21;
            let before: String = text.chars().take(at).collect();
            let line = before.matches('\n').count() + 1;
            let column = before.rsplit('\n').next().unwrap().chars().count() + 1;
            assert_eq!(
                (d.line, d.column),
                (Some(line as u64), Some(column as u64)),
                "{case:?}"
            );
        }
    }

    /// From a point in block context (the mapping open, nothing else): a plain scalar's
    /// brackets and quotes (`see [1] [[[`, `it's`) and a comment's are text; the nesting starts
    /// at `x:`'s first bracket, so its 32nd opens level 33.
    #[test]
    fn deep_flow_at_skips_block_plain_text_and_comments() {
        let text = format!(
            "note: see [1] [[[ it's {{\n# [[[[ {{\nx: {}\n",
            "[".repeat(40)
        );
        assert_eq!(deep_flow_at(&text, (1, 0), 1, 0), Some((3, 3 + 31)));
        // Inside a flow list opened on line 1: the plain `it's` and the comment end nothing.
        let text = format!("x: [it's, # ']\n {}\n", "[".repeat(40));
        assert_eq!(deep_flow_at(&text, (1, 4), 2, 1), Some((2, 1 + 30)));
    }

    /// Brackets in a scalar are text, however many: never counted as nesting.
    #[test]
    fn brackets_inside_scalars_are_not_nesting() {
        let deep = "[".repeat(300) + &"{".repeat(300);
        for text in [
            format!("note: \"{deep}\"\n"),
            format!("note: '{deep}'\n"),
            format!("note: a{deep}\n"),
            format!("note: [\"{deep}\", '{deep}', a\"b]\n"),
            format!("note: |\n  {deep}\n"),
        ] {
            let v: Value = from_str(&text, "p.yaml").unwrap_or_else(|d| panic!("{d}"));
            let note = &v["note"];
            let s = note.as_str().or_else(|| note[0].as_str()).unwrap();
            assert_eq!(s.trim_end().trim_start_matches('a'), deep);
        }
    }

    #[test]
    fn too_many_events_are_refused() {
        let text = format!("a: [{}]\n", vec!["1"; 100_001].join(","));
        let d = from_str::<Value>(&text, "p.yaml").unwrap_err();
        assert!(d.message.contains("more than 100000 values"), "{d}");
    }

    #[test]
    fn strip_locations_removes_every_location() {
        assert_eq!(
            strip_locations(
                "did not find expected key at line 3 column 5, while parsing a block mapping at line 1 column 1"
            ),
            "did not find expected key, while parsing a block mapping"
        );
    }
}

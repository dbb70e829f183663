//! Report templates: the built-in set compiled in from `report-templates/`, with a program's own
//! folder overriding it file by file, rendered by handlebars in strict mode.
//!
//! Strict mode makes a misspelt field an error that names the template, line and column.
//! Escaping stays on; charts reach the page only through the `chart` helper, which prints SVG
//! made by [`crate::render::chart`] (all text in it escaped) and nothing else raw.

use super::RenderError;
use crate::program::Program;
use handlebars::{
    Context, Handlebars, Helper, HelperResult, JsonRender, Output, RenderContext, RenderErrorReason,
};
use serde::Serialize;
use std::path::{Path, PathBuf};

/// The built-in templates: (file name, contents).
pub const BUILTIN: &[(&str, &str)] = &[
    (
        "participant.html.hbs",
        include_str!("../../report-templates/participant.html.hbs"),
    ),
    (
        "group.html.hbs",
        include_str!("../../report-templates/group.html.hbs"),
    ),
    (
        "followup.html.hbs",
        include_str!("../../report-templates/followup.html.hbs"),
    ),
    (
        "partials/style.hbs",
        include_str!("../../report-templates/partials/style.hbs"),
    ),
    (
        "partials/cautions.hbs",
        include_str!("../../report-templates/partials/cautions.hbs"),
    ),
    (
        "partials/table.hbs",
        include_str!("../../report-templates/partials/table.hbs"),
    ),
    (
        "partials/kv.hbs",
        include_str!("../../report-templates/partials/kv.hbs"),
    ),
];

/// A loaded template set.
pub struct TemplateSet {
    hb: Handlebars<'static>,
    /// Where each template came from (`built-in` or a path), by file name.
    pub sources: Vec<(String, String)>,
    /// Whether any file comes from the program's own folder: then every page it makes is checked
    /// as a browser reads it ([`output_problem`]) before it is used.
    overridden: bool,
    /// The text of each file from the program's own folder, by its path: a problem found in a
    /// page is located in them.
    override_texts: Vec<(String, String)>,
}

/// Why templates could not be loaded.
#[derive(Debug, thiserror::Error)]
pub enum TemplateError {
    /// The configured folder does not exist.
    #[error("report.templates: the folder {0} does not exist")]
    MissingDir(String),
    /// A file could not be read or is not allowed.
    #[error("{0}: {1}")]
    File(String, String),
    /// A template does not parse.
    #[error("{0}")]
    Parse(String),
    /// Partials include each other in a loop.
    #[error("partials include each other in a loop: {0}")]
    Cycle(String),
}

/// [`TemplateSet::load`], with a template of the program's own that cannot be used (it does
/// not parse, partials include each other, a link, code or an outside address in it) as the
/// program error `check`, `run` and `merge` all give (exit code 3): the program folder is
/// invalid and nothing is computed.
// A Diagnostic is the error on purpose (it is what the user sees); it is built rarely.
#[allow(clippy::result_large_err)]
pub fn load_checked(program: &Program) -> Result<TemplateSet, crate::diag::Diagnostic> {
    TemplateSet::load(program).map_err(|e| {
        crate::diag::Diagnostic::error(
            "program.yaml",
            format!("a report template of report.templates cannot be used: {e}"),
        )
        .field("report.templates")
        .hint("correct the template named; no run computes anything while it cannot be used")
    })
}

impl TemplateSet {
    /// The built-in set with the program's `report.templates` folder (if any) on top.
    pub fn load(program: &Program) -> Result<Self, TemplateError> {
        let dir = program
            .def
            .report
            .templates
            .as_ref()
            .map(|t| program.root.join(t));
        Self::with_overrides(dir.as_deref())
    }

    /// The built-in set, with files from `dir` replacing built-ins of the same name (and adding
    /// partials under `partials/`).
    pub fn with_overrides(dir: Option<&Path>) -> Result<Self, TemplateError> {
        let mut files: Vec<(String, String, String)> = BUILTIN
            .iter()
            .map(|(n, c)| (n.to_string(), c.to_string(), "built-in".to_string()))
            .collect();
        if let Some(dir) = dir {
            if !dir.is_dir() {
                return Err(TemplateError::MissingDir(dir.display().to_string()));
            }
            for (name, text, path) in read_override_dir(dir)? {
                match files.iter_mut().find(|(n, _, _)| *n == name) {
                    Some(slot) => *slot = (name, text, path),
                    None => files.push((name, text, path)),
                }
            }
        }
        let mut hb = Handlebars::new();
        hb.set_strict_mode(true);
        hb.set_prevent_indent(true);
        // Every `{{value}}` is escaped here: HTML-escaped, and its invisible direction and
        // control characters dropped (`render::neutralise`), so no text from an input can
        // reorder the report around it. The PDF is laid out from this HTML.
        hb.register_escape_fn(|s| handlebars::html_escape(&crate::render::neutralise(s)));
        register_helpers(&mut hb);
        // Each file is compiled once, by its registration, and the depth check reads the
        // templates registered: handlebars reads a template in time that grows with the square
        // of its size, and the check compiled every file a second time itself. A file whose
        // name a later file of the set takes again (`x.hbs` and `partials/x.hbs`) is no longer
        // registered by then; it alone is compiled again, so that the check still covers it.
        // The check still decides before a file that does not parse is reported.
        let key_of = |name: &str| -> String {
            let key = name.trim_end_matches(".hbs");
            key.strip_prefix("partials/").unwrap_or(key).to_string()
        };
        let mut sources = Vec::new();
        let mut registered = Vec::with_capacity(files.len());
        let mut unparsed = None;
        for (name, text, src) in &files {
            let key = key_of(name);
            match hb.register_template_string(&key, text) {
                Ok(()) => registered.push(Some(key)),
                Err(e) => {
                    registered.push(None);
                    unparsed.get_or_insert_with(|| {
                        TemplateError::Parse(format!("{src} ({name}): {e}"))
                    });
                }
            }
            sources.push((name.clone(), src.clone()));
        }
        let mut compiled = Vec::with_capacity(files.len());
        for (i, ((name, text, _), key)) in files.iter().zip(&registered).enumerate() {
            let Some(key) = key else { continue };
            let taken_again = registered[i + 1..].iter().flatten().any(|k| k == key);
            let template = match hb.get_template(key) {
                Some(t) if !taken_again => std::borrow::Cow::Borrowed(t),
                _ => match handlebars::template::Template::compile(text) {
                    Ok(t) => std::borrow::Cow::Owned(t),
                    Err(_) => continue,
                },
            };
            compiled.push((name.as_str(), key.clone(), template));
        }
        check_render_depth(compiled, &sources)?;
        if let Some(e) = unparsed {
            return Err(e);
        }
        let overridden = sources.iter().any(|(_, src)| src != "built-in");
        let override_texts = files
            .into_iter()
            .filter(|(_, _, src)| src != "built-in")
            .map(|(_, text, src)| (src, text))
            .collect();
        Ok(TemplateSet {
            hb,
            sources,
            overridden,
            override_texts,
        })
    }

    /// True when a template of the program's own replaces or adds to the built-in set.
    pub fn is_overridden(&self) -> bool {
        self.overridden
    }

    /// Where template `name` (e.g. `participant.html`) comes from, for messages:
    /// `participant.html.hbs (built-in)` or the override's path.
    pub fn source_of(&self, name: &str) -> String {
        let file = format!("{name}.hbs");
        match self.sources.iter().find(|(f, _)| *f == file) {
            Some((_, src)) if src != "built-in" => src.clone(),
            _ => format!("{file} (built-in)"),
        }
    }

    /// Renders template `name` (e.g. `participant.html`) with `ctx` plus the pre-drawn charts.
    pub fn render<T: Serialize>(
        &self,
        name: &str,
        ctx: &T,
        charts: serde_json::Map<String, serde_json::Value>,
    ) -> Result<String, RenderError> {
        let mut value = serde_json::to_value(ctx)?;
        if let serde_json::Value::Object(m) = &mut value {
            m.insert("charts".into(), serde_json::Value::Object(charts));
        }
        let html = self.render_unchecked(name, &value)?;
        // The check of the template files at load time reads their text; handlebars can build
        // what that text does not show (`<scr{{!}}ipt>`, `hr{{"e"}}f=`, `ur{{!}}l(` or a tag
        // split across partials), and input text printed inside CSS is CSS. So the page an
        // override made is checked again as a browser parses it.
        if self.overridden
            && let Some(Breach {
                what,
                needle,
                built,
            }) = output_breach(&html)
        {
            // Where it was written, when the page's text around it tells: the template's
            // literal text before the problem and the problem's first, literal, piece.
            let at = needle_offset(&html, &needle)
                .and_then(|at| locate_in_sources(&html, at, &self.override_texts))
                .map(|(path, line, column)| format!("; it starts at {path}:{line}:{column}"))
                .unwrap_or_default();
            // Said only of a problem the check of the files' text would have refused had it been
            // written there as it is: a page nested too deep is no such thing.
            let built = if built {
                " (where the file's text does not show it, a handlebars expression built it: a \
                 comment, literal or partial inside a tag, an attribute or CSS, or input text \
                 printed into CSS)"
            } else {
                ""
            };
            return Err(RenderError::Template(format!(
                "the page made from {} {what}{at}{built}",
                self.source_of(name)
            )));
        }
        Ok(html)
    }

    fn render_unchecked(
        &self,
        name: &str,
        value: &serde_json::Value,
    ) -> Result<String, RenderError> {
        self.hb.render(name, value).map_err(|e| {
            // Name the file the failing template came from: a program's own override is
            // usually the one to fix. (An error inside a partial names the partial.)
            let failing = e.template_name.clone().unwrap_or_else(|| name.to_string());
            let source = self
                .sources
                .iter()
                .find(|(file, _)| {
                    let key = file.trim_end_matches(".hbs");
                    key.strip_prefix("partials/").unwrap_or(key) == failing
                })
                .map(|(_, src)| src.clone())
                .unwrap_or_else(|| "built-in".into());
            RenderError::Template(format!("{e} (from {source})"))
        })
    }
}

/// The files of a user's template folder that are read, as (template name, path): its `.hbs`
/// files and those of its `partials/` folder, the layout `templates dump` writes and the only
/// one a template can use; nothing deeper (a `report.templates` of `/` or `..` walked and
/// compiled every `.hbs` file of the whole tree). A symbolic link among them (or as
/// `partials`) is refused; anything that is not a plain file is left out. The run's
/// fingerprint hashes the same files ([`crate::run::plan::run_key`]).
pub fn override_files(dir: &Path) -> Result<Vec<(String, PathBuf)>, TemplateError> {
    let mut out = Vec::new();
    override_level(dir, "", &mut out)?;
    let partials = dir.join("partials");
    match std::fs::symlink_metadata(&partials) {
        Ok(m) if m.file_type().is_symlink() => {
            return Err(TemplateError::File(
                partials.display().to_string(),
                "symbolic links are not allowed in a template folder".into(),
            ));
        }
        Ok(m) if m.is_dir() => override_level(&partials, "partials/", &mut out)?,
        _ => {}
    }
    Ok(out)
}

/// The `.hbs` files directly in `folder`, named `prefix` + file name.
fn override_level(
    folder: &Path,
    prefix: &str,
    out: &mut Vec<(String, PathBuf)>,
) -> Result<(), TemplateError> {
    for entry in walkdir::WalkDir::new(folder)
        .min_depth(1)
        .max_depth(1)
        .follow_links(false)
        .sort_by_file_name()
    {
        let entry =
            entry.map_err(|e| TemplateError::File(folder.display().to_string(), e.to_string()))?;
        let path = entry.path();
        if path.extension().is_none_or(|e| e != "hbs") {
            continue;
        }
        if entry.path_is_symlink() {
            return Err(TemplateError::File(
                path.display().to_string(),
                "symbolic links are not allowed in a template folder".into(),
            ));
        }
        if entry.file_type().is_file() {
            let name = format!("{prefix}{}", entry.file_name().to_string_lossy());
            out.push((name, path.to_path_buf()));
        }
    }
    Ok(())
}

/// Reads a user's template folder ([`override_files`]) with our own walk (handlebars' own
/// directory loader follows links, which could pull any readable file into a report).
fn read_override_dir(dir: &Path) -> Result<Vec<(String, String, String)>, TemplateError> {
    let mut out = Vec::new();
    let mut total = 0u64;
    for (name, path) in override_files(dir)? {
        // Opened without following links, regular files only (a link swapped in after the
        // walk is still refused); the folder's files together within MAX_TEMPLATE_BYTES.
        let text = crate::limits::read_limited(&path, MAX_TEMPLATE_BYTES - total)
            .map_err(|e| {
                if crate::limits::is_over_limit(&e) {
                    too_many_template_bytes()
                } else {
                    e.to_string()
                }
            })
            .inspect(|b| total += b.len() as u64)
            .and_then(|b| String::from_utf8(b).map_err(|_| "the file is not UTF-8 text".into()))
            .map_err(|e| TemplateError::File(path.display().to_string(), e))?;
        if let Some((at, what)) = override_problem(&text) {
            let line = text[..at].matches('\n').count() + 1;
            let column = text[..at].rsplit('\n').next().unwrap_or("").chars().count() + 1;
            return Err(TemplateError::File(
                format!("{}:{line}:{column}", path.display()),
                what,
            ));
        }
        out.push((name, text, path.display().to_string()));
    }
    Ok(out)
}

/// The most a program's template folder may hold, its `.hbs` files together (a program choice:
/// about nine times the built-in set's 14 KiB). Handlebars takes time that grows with the square
/// of a file's size to read it (each expression's position is counted from the file's start):
/// a 64 KiB partial of `{{@a}}` took 2.6 s, a 1 MB one of `{{#if}}` blocks more than two minutes
/// to load, and a file of the 64 MiB an input may have, days; at this limit a file made for it
/// takes about ten seconds.
pub const MAX_TEMPLATE_BYTES: u64 = 128 << 10;

fn too_many_template_bytes() -> String {
    format!(
        "the template folder's `.hbs` files come to more than {}, the most a program's templates \
         may hold (reading a template takes time that grows with the square of its size); keep \
         only the templates you change in the folder, and shorten them",
        crate::limits::human(MAX_TEMPLATE_BYTES)
    )
}

/// Elements that run code, embed another document or send the page somewhere: never part of a
/// report.
///
/// Also refused: SVG animation elements, which can set a link's address when the page is open
/// (`<animate attributeName="href" values="javascript:…">`), and `<noscript>`, `<noembed>` and
/// `<noframes>`, whose content a browser reads as text or as markup depending on its settings
/// (what the check reads as text another browser may load as an image).
const ACTIVE_ELEMENTS: &[&str] = &[
    "script",
    "iframe",
    "frame",
    "frameset",
    "object",
    "embed",
    "applet",
    "base",
    "form",
    "portal",
    "fencedframe",
    "noscript",
    "noembed",
    "noframes",
    "animate",
    "set",
    "animatemotion",
    "animatetransform",
    "animatecolor",
];

/// Attributes that hold a URL the browser may load or follow (HTML Living Standard's URL-valued
/// attributes, and SVG's `xlink:href`; from memory).
const URL_ATTRIBUTES: &[&str] = &[
    "href",
    "src",
    "srcset",
    "imagesrcset",
    "action",
    "formaction",
    "poster",
    "data",
    "background",
    "cite",
    "longdesc",
    "ping",
    "manifest",
    "xlink:href",
    "codebase",
    "archive",
    "lowsrc",
    "dynsrc",
    "profile",
];

/// Why a template of the program's own folder cannot be used, if it cannot: the byte offset of
/// the problem and what is wrong. A report is self-contained and prints input text only
/// escaped, whatever template made it:
/// - no raw output (`{{{name}}}`, `{{&name}}`): it would print a name or note from an input
///   file as HTML (a `<script>` in a participant's name would run in their report);
/// - no element that runs code or embeds or submits to another page (`<script>`, `<iframe>`,
///   `<form>` …) and no event-handler attribute (`onload=` …);
/// - no URL other than a link within the page (`href="#site-0"`) — not in `href`, `src` and
///   the other URL attributes, nor in CSS (`url(…)`, `@import`): a report opened on a
///   participant's phone would otherwise fetch an outside address (telling it who opened which
///   report) or carry a path of the machine that made it.
fn override_problem(text: &str) -> Option<(usize, String)> {
    // Byte offsets throughout (the lower-case copy keeps them); text is only sliced at ASCII
    // delimiters, which are never inside a multi-byte character.
    let b = text.to_ascii_lowercase().into_bytes();
    let find = |from: usize, needle: &[u8]| -> Option<usize> {
        b.get(from..)?
            .windows(needle.len())
            .position(|w| w == needle)
            .map(|p| from + p)
    };
    let mut at = 0;
    while let Some(i) = find(at, b"{{") {
        let mut j = i + 2;
        while b.get(j) == Some(&b'~') {
            j += 1;
        }
        if matches!(b.get(j), Some(b'{' | b'&')) {
            return Some((
                i,
                "raw output (`{{{ }}}` or `{{& }}`) is not allowed in a report template: it \
                 would print text from input files as HTML; print values with double braces \
                 (`{{name}}`), which escape them, and charts with {{chart \"name\"}}"
                    .into(),
            ));
        }
        at = i + 2;
    }
    // CSS anywhere in the template (a <style> element, a partial with the style sheet).
    if let Some(p) = css_url(&b, 0) {
        return Some(p);
    }
    let is_space = |c: u8| c.is_ascii_whitespace();
    let mut i = 0;
    while i < b.len() {
        if b[i..].starts_with(b"<!--") {
            i = find(i, b"-->").map_or(b.len(), |e| e + 3);
            continue;
        }
        if b[i] != b'<' || !b.get(i + 1).is_some_and(u8::is_ascii_alphabetic) {
            i += 1;
            continue;
        }
        let start = i;
        i += 1;
        let name_start = i;
        while i < b.len() && (b[i].is_ascii_alphanumeric() || b[i] == b'-' || b[i] == b':') {
            i += 1;
        }
        let element = String::from_utf8_lossy(&b[name_start..i]).into_owned();
        if ACTIVE_ELEMENTS.contains(&element.as_str()) {
            return Some((
                start,
                format!(
                    "`<{element}>` is not allowed in a report template: a report runs no code \
                     and embeds or submits to no other page"
                ),
            ));
        }
        // Attributes, up to the end of the tag; handlebars expressions inside are skipped.
        loop {
            while i < b.len() && is_space(b[i]) {
                i += 1;
            }
            if i >= b.len() || b[i] == b'>' {
                break;
            }
            if b[i..].starts_with(b"{{") {
                i = find(i, b"}}").map_or(b.len(), |e| e + 2);
                continue;
            }
            if b[i] == b'/' || b[i] == b'=' {
                i += 1;
                continue;
            }
            let attr_start = i;
            while i < b.len()
                && !is_space(b[i])
                && !matches!(b[i], b'=' | b'>' | b'/')
                && !b[i..].starts_with(b"{{")
            {
                i += 1;
            }
            let attr = String::from_utf8_lossy(&b[attr_start..i]).into_owned();
            let (mut value_at, mut value_end) = (i, i);
            let mut j = i;
            while j < b.len() && is_space(b[j]) {
                j += 1;
            }
            if b.get(j) == Some(&b'=') {
                j += 1;
                while j < b.len() && is_space(b[j]) {
                    j += 1;
                }
                if let Some(&q) = b.get(j).filter(|&&q| q == b'"' || q == b'\'') {
                    value_at = j + 1;
                    value_end = find(value_at, &[q]).unwrap_or(b.len());
                    i = (value_end + 1).min(b.len());
                } else {
                    value_at = j;
                    value_end = j;
                    while value_end < b.len() && !is_space(b[value_end]) && b[value_end] != b'>' {
                        value_end += 1;
                    }
                    i = value_end;
                }
            }
            if attr.starts_with("on") || attr == "http-equiv" || attr == "srcdoc" {
                return Some((
                    attr_start,
                    format!(
                        "the attribute `{attr}` is not allowed in a report template: a report \
                         runs no code and never reloads or redirects itself"
                    ),
                ));
            }
            let value = &b[value_at..value_end];
            let trimmed = value.trim_ascii();
            if URL_ATTRIBUTES.contains(&attr.as_str())
                && !trimmed.is_empty()
                && !trimmed.starts_with(b"#")
            {
                return Some((
                    value_at,
                    format!(
                        "`{attr}` names an address outside the report (`{}`); a report is \
                         self-contained: only links within the page (`#…`) are allowed; write \
                         an outside address as text",
                        &text[value_at..value_end]
                    ),
                ));
            }
            if attr == "style"
                && let Some((at, what)) = css_url(value, value_at)
            {
                return Some((at, what));
            }
        }
        i += 1;
    }
    None
}

/// The first CSS reference to an outside resource in `css` (lower case), as (offset + its
/// position, what): `@import`, or `url(…)` that is not a fragment (`url(#clip)`).
fn css_url(css: &[u8], offset: usize) -> Option<(usize, String)> {
    for (at, w) in css.windows(7).enumerate() {
        if w == b"@import" {
            return Some((
                offset + at,
                "`@import` is not allowed in a report template: a report loads no outside \
                 style sheet"
                    .into(),
            ));
        }
    }
    for (at, w) in css.windows(4).enumerate() {
        if w == b"url(" {
            let arg = css[at + 4..]
                .trim_ascii_start()
                .strip_prefix(b"\"")
                .or_else(|| css[at + 4..].trim_ascii_start().strip_prefix(b"'"))
                .unwrap_or(css[at + 4..].trim_ascii_start());
            if !arg.starts_with(b"#") {
                return Some((
                    offset + at,
                    "`url(…)` is not allowed in a report template's CSS: a report loads \
                     nothing from outside itself"
                        .into(),
                ));
            }
        }
    }
    None
}

/// What is wrong with a page an override made, read as a browser reads it (html5ever, the
/// HTML standard's parser: entities decoded, attribute names as the browser keeps them, SVG and
/// `<template>` content included), if anything: the same rules as [`override_problem`] applies
/// to the template files, on the result. A problem is described for the message
/// ("holds `<script>`…").
pub fn output_problem(html: &str) -> Option<String> {
    output_breach(html).map(|b| b.what)
}

/// A problem [`output_breach`] found in a page an override made.
struct Breach {
    /// What is wrong, for the message.
    what: String,
    /// Where it starts in the page's text.
    needle: Needle,
    /// Whether the check of the template files' text would have refused it had it been
    /// written there as it is (so a handlebars expression built it); not so of a page nested
    /// too deep, which is a matter of size.
    built: bool,
}

impl Breach {
    fn built(what: String, needle: Needle) -> Breach {
        Breach {
            what,
            needle,
            built: true,
        }
    }
}

/// Where a problem [`output_breach`] found is written in the page's text: the piece of text
/// that starts it.
#[derive(Debug, Clone, PartialEq)]
enum Needle {
    /// An element's start tag (`<script`).
    Element(String),
    /// An attribute, by its name, and for an address the start of its value as written.
    Attribute(String, Option<String>),
}

/// How deep elements may nest in a page a program's own templates made (a program choice:
/// the built-in pages nest fewer than 20 deep). The page's text is read for the PDF and for the
/// cautions by walking its elements, a call on the stack for each level: 5,000 nested `<div>`
/// written in a template overflowed a worker thread's stack and aborted the run (exit code
/// 134, no message).
pub const MAX_ELEMENT_DEPTH: usize = 256;

/// [`output_problem`], with the piece of the page's text that starts the problem.
fn output_breach(html: &str) -> Option<Breach> {
    let page = scraper::Html::parse_document(html);
    // Counted without recursion, before anything walks the page.
    let mut depth = 0usize;
    for edge in page.tree.root().traverse() {
        match edge {
            ego_tree::iter::Edge::Open(n) if n.value().is_element() => {
                depth += 1;
                if depth > MAX_ELEMENT_DEPTH {
                    let name = n.value().as_element().map_or("", |e| e.name());
                    return Some(Breach {
                        what: format!(
                            "nests elements more than {MAX_ELEMENT_DEPTH} deep (`<{name}>` at \
                             that depth), more than a report page may: its text is read for the \
                             PDF one level at a time; flatten the template"
                        ),
                        needle: Needle::Element(name.to_ascii_lowercase()),
                        built: false,
                    });
                }
            }
            ego_tree::iter::Edge::Close(n) if n.value().is_element() => depth -= 1,
            _ => {}
        }
    }
    for node in page.tree.nodes() {
        let scraper::Node::Element(e) = node.value() else {
            continue;
        };
        let element = e.name().to_ascii_lowercase();
        if ACTIVE_ELEMENTS.contains(&element.as_str()) {
            return Some(Breach::built(
                format!(
                    "holds `<{element}>`, which is not allowed in a report: a report runs no code \
                     and embeds or submits to no other page"
                ),
                Needle::Element(element),
            ));
        }
        if element == "style" {
            let css: String = node
                .descendants()
                .filter_map(|d| match d.value() {
                    scraper::Node::Text(t) => Some(&**t),
                    _ => None,
                })
                .collect();
            if let Some(what) = css_outside(&css) {
                return Some(Breach::built(
                    format!("holds a `<style>` element with {what}"),
                    Needle::Element(element),
                ));
            }
        }
        for (attr, value) in e.attrs() {
            let attr = attr.to_ascii_lowercase();
            if attr.starts_with("on") || attr == "http-equiv" || attr == "srcdoc" {
                return Some(Breach::built(
                    format!(
                        "holds the attribute `{attr}` (on `<{element}>`), which is not allowed in a \
                         report: a report runs no code and never reloads or redirects itself"
                    ),
                    Needle::Attribute(attr, None),
                ));
            }
            // A browser strips leading and trailing spaces and control characters from a URL.
            let address = value.trim_matches(|c: char| c <= ' ');
            if URL_ATTRIBUTES.contains(&attr.as_str())
                && !address.is_empty()
                && !address.starts_with('#')
            {
                let start: String = address.chars().take(12).collect();
                return Some(Breach::built(
                    format!(
                        "holds `{attr}=\"{}\"` (on `<{element}>`), an address outside the report; \
                         a report is self-contained: only links within the page (`#…`) are allowed",
                        clip(value, 200)
                    ),
                    Needle::Attribute(attr, Some(start)),
                ));
            }
            // `style`, and SVG's presentation attributes (`fill="url(…)"`, `filter`, `mask`).
            if let Some(what) = css_outside(value) {
                return Some(Breach::built(
                    format!("holds the attribute `{attr}` (on `<{element}>`) with {what}"),
                    Needle::Attribute(attr, None),
                ));
            }
        }
    }
    None
}

/// The byte offset in `html` where `needle` is written, when it is written there exactly once
/// (otherwise which one the problem is cannot be told from the text, and `None`). Names are
/// matched in any case, as a browser reads them.
fn needle_offset(html: &str, needle: &Needle) -> Option<usize> {
    let lower = html.to_ascii_lowercase();
    let name_end = |c: Option<char>| c.is_none_or(|c| c.is_whitespace() || "/>=".contains(c));
    let found: Vec<usize> = match needle {
        Needle::Element(name) => {
            let tag = format!("<{name}");
            lower
                .match_indices(&tag)
                .filter(|(at, _)| name_end(lower[at + tag.len()..].chars().next()))
                .map(|(at, _)| at)
                .collect()
        }
        Needle::Attribute(name, value) => lower
            .match_indices(name.as_str())
            .filter(|(at, _)| {
                let before = lower[..*at].chars().next_back();
                let after = &lower[at + name.len()..];
                before.is_some_and(|c| c.is_whitespace() || "\"'/:".contains(c))
                    && name_end(after.chars().next())
                    && value.as_ref().is_none_or(|v| {
                        let rest = after.trim_start().strip_prefix('=').unwrap_or("");
                        let rest = rest.trim_start().trim_start_matches(['"', '\'']);
                        rest.trim_start().starts_with(&v.to_ascii_lowercase())
                    })
            })
            .map(|(at, _)| {
                // From the start of the name as written (`xlink:href` from `xlink`).
                let start = lower[..at].rfind(|c: char| c.is_whitespace() || "\"'/".contains(c));
                start.map_or(at, |s| s + 1)
            })
            .collect(),
    };
    match found[..] {
        [at] => Some(at),
        _ => None,
    }
}

/// Where in the override files the text at byte `at` of `html` was written: the longest piece
/// of the page around `at` (the template text just before the problem and the start of the
/// problem itself, as far as they were written literally) found exactly once in exactly one
/// file, as (file, line, column) of the place matching `at`. `None` when no piece of at least
/// four characters is found, or it is found in several places.
fn locate_in_sources(
    html: &str,
    at: usize,
    sources: &[(String, String)],
) -> Option<(String, usize, usize)> {
    // Character boundaries up to 200 characters each side of `at`.
    let back: Vec<usize> = std::iter::once(at)
        .chain(html[..at].char_indices().rev().map(|(i, _)| i).take(200))
        .collect();
    let ahead: Vec<usize> = std::iter::once(at)
        .chain(
            html[at..]
                .char_indices()
                .skip(1)
                .map(|(i, _)| at + i)
                .chain(std::iter::once(html.len()))
                .take(200),
        )
        .collect();
    let mut best: Option<(usize, String, usize, usize)> = None;
    let mut tied = false;
    for (path, text) in sources {
        let occurs = |b: usize, f: usize| text.contains(&html[back[b]..ahead[f]]);
        // The windows found form a staircase (a shorter window of a found one is found):
        // walk it once, the most text ahead for each amount of text before.
        let mut f = ahead.len() - 1;
        for b in 0..back.len() {
            while f > 0 && !occurs(b, f) {
                f -= 1;
            }
            if f == 0 && b > 0 && !occurs(b, 0) {
                break;
            }
            let window = &html[back[b]..ahead[f]];
            let chars = window.chars().count();
            if chars < 4 || text.matches(window).count() != 1 {
                continue;
            }
            let start = text.find(window).expect("found above") + (at - back[b]);
            let line = text[..start].matches('\n').count() + 1;
            let column = text[..start]
                .rsplit('\n')
                .next()
                .unwrap_or("")
                .chars()
                .count()
                + 1;
            let here = (chars, path.clone(), line, column);
            match &best {
                Some(x) if x.0 > chars => {}
                // As long, elsewhere: the text around the problem does not tell which.
                Some(x) if x.0 == chars => tied |= *x != here,
                _ => {
                    tied = false;
                    best = Some(here);
                }
            }
        }
    }
    if tied {
        return None;
    }
    best.map(|(_, path, line, column)| (path, line, column))
}

/// The first reference to an outside resource in CSS as a browser reads it, described: comments
/// left out and escapes decoded (`u\72l(` is `url(`), then `@import`, `url(…)` other than a
/// fragment (`url(#clip)`), or a function that takes an address as a string (`image-set("…")`,
/// `image("…")`, `src("…")`, `cross-fade(…)`).
fn css_outside(css: &str) -> Option<String> {
    if !css.contains(['(', '@']) {
        return None;
    }
    let plain = css_plain(css);
    if plain.contains("@import") {
        return Some("`@import`: a report loads no outside style sheet".into());
    }
    let mut from = 0;
    while let Some(at) = plain[from..].find("url(").map(|p| from + p) {
        let arg = plain[at + 4..].trim_start();
        let arg = arg.strip_prefix(['"', '\'']).unwrap_or(arg).trim_start();
        if !arg.starts_with('#') {
            return Some(format!(
                "`{}`: a report loads nothing from outside itself",
                clip(&plain[at..], 80)
            ));
        }
        from = at + 4;
    }
    for function in ["image-set(", "image(", "src(", "cross-fade("] {
        if let Some(at) = plain.find(function) {
            return Some(format!(
                "`{}`: a report loads nothing from outside itself",
                clip(&plain[at..], 80)
            ));
        }
    }
    None
}

/// At most `n` characters of `s`, with `…` when cut (a message quotes a value, not a page).
fn clip(s: &str, n: usize) -> String {
    match s.char_indices().nth(n) {
        Some((at, _)) => format!("{}…", &s[..at]),
        None => s.to_string(),
    }
}

/// CSS as its tokenizer reads it, lower case: comments left out and escapes decoded (CSS Syntax
/// Level 3, 4.3.7: a backslash with one to six hex digits and an optional space is that code
/// point, a backslash before a line end is dropped, before anything else it is that character).
fn css_plain(css: &str) -> String {
    let mut out = String::with_capacity(css.len());
    let mut chars = css.chars().peekable();
    while let Some(c) = chars.next() {
        match c {
            '/' if chars.peek() == Some(&'*') => {
                chars.next();
                let mut last = ' ';
                for c in chars.by_ref() {
                    if last == '*' && c == '/' {
                        break;
                    }
                    last = c;
                }
            }
            '\\' => match chars.peek().copied() {
                Some(h) if h.is_ascii_hexdigit() => {
                    let mut code = 0u32;
                    let mut n = 0;
                    while n < 6
                        && let Some(d) = chars.peek().and_then(|h| h.to_digit(16))
                    {
                        code = code * 16 + d;
                        chars.next();
                        n += 1;
                    }
                    if chars.peek().is_some_and(|w| w.is_ascii_whitespace()) {
                        chars.next();
                    }
                    out.push(
                        char::from_u32(code)
                            .filter(|&c| c != '\0')
                            .unwrap_or('\u{fffd}'),
                    );
                }
                Some('\n' | '\r' | '\x0c') => {
                    chars.next();
                }
                Some(other) => {
                    chars.next();
                    out.push(other);
                }
                None => {}
            },
            c => out.push(c),
        }
    }
    out.to_lowercase()
}

/// How deep blocks (`{{#if}}`, `{{#each}}` …) and partial calls may nest when a page is
/// rendered, counted through every partial a template calls (a program choice: the built-in
/// templates nest fewer than 10 deep). Each level is a handlebars call on the stack: a partial
/// of 2,000 nested `{{#if}}` overflowed a worker thread's stack and aborted the run (exit code
/// 134, no message), and an inline partial that calls itself did so at any depth.
pub const MAX_RENDER_DEPTH: usize = 64;

/// Refuses templates whose rendering would nest deeper than [`MAX_RENDER_DEPTH`], partials
/// that call each other in a loop (a → b → a, which never ends), and partials named by an
/// expression (which of them is called, and how deep it nests, depends on the data). Read from
/// the parsed templates, so every way of calling a partial counts: `{{> name}}`, `{{~> name}}`,
/// `{{#> name}}…{{/name}}`, and inline partials (`{{#*inline "name"}}…{{/inline}}`). A text
/// scan for `{{>` missed all but the first, and an inline partial calling itself overflowed
/// the stack. A file that does not parse is left to its registration, which says why.
///
/// `compiled` holds (file name, template name, template) for each file that parses, in the
/// order of the set's files; `files` (file name, where it comes from) every file of the set.
fn check_render_depth(
    mut compiled: Vec<(
        &str,
        String,
        std::borrow::Cow<'_, handlebars::template::Template>,
    )>,
    files: &[(String, String)],
) -> Result<(), TemplateError> {
    use handlebars::template::{Template, TemplateElement};
    use std::collections::HashMap;
    // Partials first, so that a partial nested too deep is named itself rather than the page
    // that calls it.
    compiled.sort_by_key(|(name, ..)| !name.starts_with("partials/"));
    let parsed: Vec<(String, &Template)> = compiled
        .iter()
        .map(|(_, key, t)| (key.clone(), t.as_ref()))
        .collect();
    // Every body a name can stand for: the file registered under it and the inline partials
    // defined under it anywhere (an inline partial shadows a file's only where it is defined;
    // counting all of them is the safe side).
    let mut bodies: HashMap<String, Vec<&Template>> = HashMap::new();
    fn inline_definitions<'a>(
        t: &'a Template,
        out: &mut Vec<(Result<String, String>, &'a Template)>,
    ) {
        for e in &t.elements {
            match e {
                TemplateElement::DecoratorBlock(d) | TemplateElement::DecoratorExpression(d) => {
                    if let Some(body) = &d.template {
                        if partial_name(&d.name).as_deref() == Ok("inline") {
                            let name = match d.params.first() {
                                Some(handlebars::template::Parameter::Literal(
                                    serde_json::Value::String(n),
                                )) => Ok(n.clone()),
                                _ => Err("an inline partial named by an expression".to_string()),
                            };
                            out.push((name, body));
                        }
                        inline_definitions(body, out);
                    }
                }
                TemplateElement::HelperBlock(h) => {
                    for body in h.template.iter().chain(h.inverse.iter()) {
                        inline_definitions(body, out);
                    }
                }
                TemplateElement::PartialBlock(d) | TemplateElement::PartialExpression(d) => {
                    if let Some(body) = &d.template {
                        inline_definitions(body, out);
                    }
                }
                _ => {}
            }
        }
    }
    for &(ref key, t) in &parsed {
        bodies.entry(key.clone()).or_default().push(t);
        let mut inline = Vec::new();
        inline_definitions(t, &mut inline);
        for (name, body) in inline {
            let name = name.map_err(|what| dynamic_partial(key, &what))?;
            bodies.entry(name).or_default().push(body);
        }
    }
    struct Walk<'a> {
        bodies: &'a HashMap<String, Vec<&'a Template>>,
        depth_of: HashMap<String, usize>,
        stack: Vec<String>,
        file: String,
    }
    impl Walk<'_> {
        /// The deepest nesting of blocks and partial calls rendering `t` reaches.
        fn depth(&mut self, t: &Template) -> Result<usize, TemplateError> {
            let mut deepest = 0;
            for e in &t.elements {
                let d = match e {
                    TemplateElement::HelperBlock(h) => {
                        let mut inner = 0;
                        for body in h.template.iter().chain(h.inverse.iter()) {
                            inner = inner.max(self.depth(body)?);
                        }
                        1 + inner
                    }
                    // An inline partial's body is rendered where it is called.
                    TemplateElement::DecoratorBlock(d)
                        if partial_name(&d.name).as_deref() == Ok("inline") =>
                    {
                        0
                    }
                    TemplateElement::DecoratorBlock(d) => match &d.template {
                        Some(body) => 1 + self.depth(body)?,
                        None => 1,
                    },
                    TemplateElement::PartialExpression(d) | TemplateElement::PartialBlock(d) => {
                        let name = partial_name(&d.name)
                            .map_err(|what| dynamic_partial(&self.file, &what))?;
                        // `{{> @partial-block}}` renders its caller's block, counted there.
                        let called = if name == "@partial-block" {
                            0
                        } else {
                            self.node(&name)?
                        };
                        let block = match &d.template {
                            Some(body) => self.depth(body)?,
                            None => 0,
                        };
                        1 + called + block
                    }
                    _ => 0,
                };
                deepest = deepest.max(d);
            }
            Ok(deepest)
        }

        /// The deepest nesting the partial (or template) `name` reaches; a name on the way
        /// to itself is a loop.
        fn node(&mut self, name: &str) -> Result<usize, TemplateError> {
            if let Some(&d) = self.depth_of.get(name) {
                return Ok(d);
            }
            if let Some(at) = self.stack.iter().position(|s| s == name) {
                let mut path = self.stack[at..].to_vec();
                path.push(name.to_string());
                return Err(TemplateError::Cycle(path.join(" → ")));
            }
            let Some(bodies) = self.bodies.get(name) else {
                // Not a partial of the set: the render says so (strict mode).
                return Ok(0);
            };
            self.stack.push(name.to_string());
            let mut deepest = 0;
            for body in bodies.clone() {
                deepest = deepest.max(self.depth(body)?);
            }
            self.stack.pop();
            self.depth_of.insert(name.to_string(), deepest);
            Ok(deepest)
        }
    }
    let mut walk = Walk {
        bodies: &bodies,
        depth_of: HashMap::new(),
        stack: Vec::new(),
        file: String::new(),
    };
    for (key, _) in &parsed {
        walk.file = key.clone();
        let depth = walk.node(key)?;
        if depth > MAX_RENDER_DEPTH {
            return Err(TemplateError::Parse(format!(
                "{}: blocks and partials nest {depth} deep when it is rendered, more than the \
                 {MAX_RENDER_DEPTH} a report template may (each level is a call on the stack \
                 of the thread that renders it); flatten it",
                files
                    .iter()
                    .find(|(n, _)| {
                        let k = n.trim_end_matches(".hbs");
                        k.strip_prefix("partials/").unwrap_or(k) == key
                    })
                    .map_or(key.as_str(), |(_, src)| src.as_str())
            )));
        }
    }
    Ok(())
}

/// The name of a partial call or a decorator as written (`{{> kv}}`, `{{> "kv"}}`,
/// `{{> partials/kv}}`), or `Err` with what it is when an expression computes it.
fn partial_name(p: &handlebars::template::Parameter) -> Result<String, String> {
    use handlebars::template::Parameter;
    match p {
        Parameter::Name(n) => Ok(n.clone()),
        Parameter::Path(handlebars::Path::Relative((_, raw)))
        | Parameter::Path(handlebars::Path::Local((_, _, raw))) => Ok(raw.clone()),
        Parameter::Literal(serde_json::Value::String(s)) => Ok(s.clone()),
        Parameter::Literal(other) => Ok(other.to_string()),
        _ => Err("a partial named by an expression".to_string()),
    }
}

fn dynamic_partial(file: &str, what: &str) -> TemplateError {
    TemplateError::Parse(format!(
        "{file}: {what} (`{{{{> (…)}}}}`) is not allowed in a report template: which partial it \
         calls would depend on the data; name the partial"
    ))
}

fn register_helpers(hb: &mut Handlebars<'static>) {
    // {{chart "weight"}}: the pre-drawn SVG chart of that name, raw. Only names under the
    // context's `charts` map can be printed this way, never input data.
    hb.register_helper(
        "chart",
        Box::new(
            |h: &Helper<'_>,
             _: &Handlebars<'_>,
             ctx: &Context,
             _: &mut RenderContext<'_, '_>,
             out: &mut dyn Output|
             -> HelperResult {
                let name = h
                    .param(0)
                    .and_then(|p| p.value().as_str())
                    .ok_or_else(|| RenderErrorReason::ParamNotFoundForIndex("chart", 0))?;
                let svg = ctx
                    .data()
                    .get("charts")
                    .and_then(|c| c.get(name))
                    .and_then(|s| s.as_str())
                    .ok_or_else(|| RenderErrorReason::Other(format!("no chart named `{name}`")))?;
                out.write(svg)?;
                Ok(())
            },
        ),
    );
    // The other helpers turn their parameters into text, always escaped.
    text_helper(hb, "len", |h| {
        // {{len list}}: number of items of a list.
        let v = h
            .param(0)
            .ok_or(RenderErrorReason::ParamNotFoundForIndex("len", 0))?;
        Ok(v.value().as_array().map_or(0, |a| a.len()).to_string())
    });
    text_helper(hb, "fixed", |h| {
        // {{fixed number decimals}}: a number with a fixed number of decimals.
        let v = h
            .param(0)
            .and_then(|p| p.value().as_f64())
            .ok_or(RenderErrorReason::ParamNotFoundForIndex("fixed", 0))?;
        let d = h.param(1).and_then(|p| p.value().as_u64()).unwrap_or(1) as usize;
        Ok(super::format::fixed(v, d))
    });
    text_helper(hb, "percent", |h| {
        // {{percent number}}: `62 %`.
        let v = h
            .param(0)
            .and_then(|p| p.value().as_f64())
            .ok_or(RenderErrorReason::ParamNotFoundForIndex("percent", 0))?;
        Ok(super::format::percent(v, 0))
    });
    text_helper(hb, "date", |h| {
        // {{date "2026-09-14"}}: `14 Sep 2026`; anything else is printed as it is.
        let v = h
            .param(0)
            .ok_or(RenderErrorReason::ParamNotFoundForIndex("date", 0))?;
        let s = v.value().render();
        Ok(chrono::NaiveDate::parse_from_str(&s, "%Y-%m-%d")
            .map(super::format::date)
            .unwrap_or(s))
    });
}

/// Registers a helper whose output is the text `f` makes from its parameters, HTML-escaped.
fn text_helper(
    hb: &mut Handlebars<'static>,
    name: &'static str,
    f: fn(&Helper<'_>) -> Result<String, RenderErrorReason>,
) {
    hb.register_helper(
        name,
        Box::new(
            move |h: &Helper<'_>,
                  _: &Handlebars<'_>,
                  _: &Context,
                  _: &mut RenderContext<'_, '_>,
                  out: &mut dyn Output|
                  -> HelperResult {
                out.write(&handlebars::html_escape(&crate::render::neutralise(&f(h)?)))?;
                Ok(())
            },
        ),
    );
}

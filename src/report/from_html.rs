//! The PDF of a report, laid out from the HTML its template produced: one description, two
//! formats. A template override therefore changes the PDF as much as the HTML.
//!
//! The HTML is parsed with html5ever (through `scraper`) and mapped, element by element, onto the
//! PDF renderer's blocks ([`crate::render::pdf::Block`]). Only a documented subset of HTML has a
//! PDF meaning (report-templates/CONTEXT.md, "HTML the PDF understands"); any other element is a
//! render error naming the template and the element, so a template never loses content in the
//! PDF silently. Page concerns — page breaks, repeated table headers, running header and footer
//! as artifacts — stay in the renderer.

use std::collections::BTreeMap;

use chrono::{NaiveDate, NaiveDateTime};
use ego_tree::NodeRef;
use scraper::{ElementRef, Html, Node};

use super::RenderError;
use crate::render::chart::Chart;
use crate::render::pdf::{Block, Document, Tone, render_pdf};

/// What the page frame adds around the template's content (not content itself).
pub struct Frame {
    /// Running header on every page.
    pub header: String,
    /// Running footer on every page.
    pub footer: String,
    /// Document subject (metadata).
    pub subject: String,
    /// Document author (metadata).
    pub author: String,
    /// The last day of the report's period, ISO: the creation date, so re-runs give equal bytes.
    pub period_to: String,
    /// Seed of the PDF document id.
    pub id_seed: String,
}

/// Creation time of a report: the end of its period (never the clock), so an unchanged re-run
/// gives identical bytes.
fn created(period_to: &str) -> NaiveDateTime {
    NaiveDate::parse_from_str(period_to, "%Y-%m-%d")
        .unwrap_or_default()
        .and_hms_opt(23, 59, 0)
        .expect("valid time")
}

/// Lays out `html` (made by template `template`, named as `source` in errors) as a PDF, with the
/// drawn `charts` that `data-chart` attributes name.
pub fn pdf(
    html: &str,
    source: &str,
    charts: &BTreeMap<String, Chart>,
    frame: Frame,
) -> Result<Vec<u8>, RenderError> {
    let page = convert(html, source, charts)?;
    let doc = Document {
        title: page.title,
        subject: frame.subject,
        author: frame.author,
        header: frame.header,
        footer: frame.footer,
        lang: page.lang,
        blocks: page.blocks,
        created: created(&frame.period_to),
        id_seed: frame.id_seed,
    };
    render_pdf(&doc).map_err(|e| RenderError::Pdf(e.to_string()))
}

/// The content of a page of HTML, as PDF blocks.
#[derive(Debug)]
pub struct Page {
    /// Text of `<title>`.
    pub title: String,
    /// `lang` of `<html>` (`en` when absent).
    pub lang: String,
    /// The body, top to bottom.
    pub blocks: Vec<Block>,
}

/// Maps `html` onto PDF blocks (see the module documentation).
pub fn convert(
    html: &str,
    source: &str,
    charts: &BTreeMap<String, Chart>,
) -> Result<Page, RenderError> {
    let doc = Html::parse_document(html);
    let root = doc.root_element();
    let title = root
        .descendent_elements()
        .find(|e| e.value().name() == "title")
        .map(|t| collapse(&t.text().collect::<String>()))
        .unwrap_or_default();
    // A language tag is letters, digits and hyphens (BCP 47); anything else falls back to `en`.
    let lang = root
        .attr("lang")
        .map(str::trim)
        .filter(|l| !l.is_empty() && l.chars().all(|c| c.is_ascii_alphanumeric() || c == '-'))
        .unwrap_or("en")
        .to_string();
    let mut c = Converter {
        source,
        charts,
        blocks: Vec::new(),
    };
    c.container(root, false)?;
    Ok(Page {
        title,
        lang,
        blocks: c.blocks,
    })
}

/// Elements that are text within a line (their text joins the surrounding paragraph).
const INLINE: &[&str] = &[
    "a", "abbr", "b", "bdi", "bdo", "br", "cite", "code", "data", "dfn", "em", "i", "kbd", "mark",
    "q", "s", "samp", "small", "span", "strong", "sub", "sup", "time", "u", "var", "wbr",
];

/// Elements that only group others; their children are laid out in order.
const CONTAINERS: &[&str] = &[
    "html", "body", "main", "header", "footer", "section", "article", "div",
];

/// Elements with no content for a reader, left out of the PDF.
const IGNORED: &[&str] = &[
    "head", "style", "meta", "link", "title", "template", "noscript", "hr", "nav",
];

/// Classes that make text small and grey in the PDF, as in the style sheet.
const SMALL_CLASSES: &[&str] = &["small", "muted", "program", "suppressed", "facts"];

/// Classes for content that exists for one medium only; `running-header` marks the line the
/// PDF already prints as its running header on every page (not printed twice on page 1).
const SCREEN_ONLY: &[&str] = &["screen-only", "chart-narrow", "running-header"];

fn has_class(e: ElementRef<'_>, list: &[&str]) -> bool {
    e.value().classes().any(|c| list.contains(&c))
}

/// Runs of white space made single spaces, ends trimmed; explicit line breaks (`\n` from `<br>`)
/// kept.
fn collapse(s: &str) -> String {
    s.split('\n')
        .map(|l| l.split_whitespace().collect::<Vec<_>>().join(" "))
        .collect::<Vec<_>>()
        .join("\n")
}

struct Converter<'a> {
    source: &'a str,
    charts: &'a BTreeMap<String, Chart>,
    blocks: Vec<Block>,
}

impl Converter<'_> {
    fn error(&self, e: ElementRef<'_>, why: &str) -> RenderError {
        let mut name = format!("<{}", e.value().name());
        for (k, v) in e.value().attrs().take(2) {
            name.push_str(&format!(" {k}=\"{v}\""));
        }
        name.push('>');
        RenderError::Template(format!(
            "{}: {name} {why} (see \"HTML the PDF understands\" in report-templates/CONTEXT.md)",
            self.source
        ))
    }

    fn paragraph(&mut self, text: String, small: bool) {
        let text = text.trim_matches([' ', '\n']).to_string();
        if text.is_empty() {
            return;
        }
        self.blocks.push(if small {
            Block::Small(text)
        } else {
            Block::Paragraph(text)
        });
    }

    /// Lays out the children of a container; loose text between blocks becomes paragraphs.
    fn container(&mut self, e: ElementRef<'_>, small: bool) -> Result<(), RenderError> {
        let mut loose = String::new();
        for child in e.children() {
            match child.value() {
                Node::Text(t) => loose.push_str(t),
                Node::Element(el) => {
                    let ce = ElementRef::wrap(child).expect("element");
                    if skipped(ce) {
                        continue;
                    }
                    if el.name() == "small" && collapse(&loose).trim().is_empty() {
                        // A `<small>` standing on its own is a block of small print.
                        loose.clear();
                        let text = self.flat_text(ce)?;
                        self.paragraph(text, true);
                    } else if INLINE.contains(&el.name()) {
                        loose.push_str(&self.inline(ce)?);
                    } else {
                        self.paragraph(collapse(&std::mem::take(&mut loose)), small);
                        self.block(ce, small)?;
                    }
                }
                _ => {}
            }
        }
        self.paragraph(collapse(&loose), small);
        Ok(())
    }

    /// The text of inline content: elements outside the inline set are errors.
    fn inline(&self, e: ElementRef<'_>) -> Result<String, RenderError> {
        let mut out = String::new();
        self.inline_into(*e, &mut out)?;
        Ok(out)
    }

    fn inline_into(&self, n: NodeRef<'_, Node>, out: &mut String) -> Result<(), RenderError> {
        match n.value() {
            Node::Text(t) => out.push_str(t),
            Node::Element(el) => {
                let e = ElementRef::wrap(n).expect("element");
                if skipped(e) {
                    return Ok(());
                }
                match el.name() {
                    "br" => out.push('\n'),
                    name if INLINE.contains(&name) => {
                        for c in n.children() {
                            self.inline_into(c, out)?;
                        }
                    }
                    _ => return Err(self.error(e, "is not allowed inside a line of text")),
                }
            }
            _ => {}
        }
        Ok(())
    }

    /// Text of an element whose children are inline, or blocks of inline text (list items,
    /// table cells, `dd`): blocks are joined with a space.
    fn flat_text(&self, e: ElementRef<'_>) -> Result<String, RenderError> {
        let mut out = String::new();
        for child in e.children() {
            match child.value() {
                Node::Element(el) if !INLINE.contains(&el.name()) => {
                    let ce = ElementRef::wrap(child).expect("element");
                    if skipped(ce) {
                        continue;
                    }
                    if !matches!(el.name(), "p" | "div") {
                        return Err(self.error(ce, "is not allowed here in a PDF (only text)"));
                    }
                    out.push(' ');
                    out.push_str(&self.flat_text(ce)?);
                    out.push(' ');
                }
                _ => self.inline_into(child, &mut out)?,
            }
        }
        Ok(collapse(&out).trim().to_string())
    }

    fn block(&mut self, e: ElementRef<'_>, small: bool) -> Result<(), RenderError> {
        let name = e.value().name();
        let small = small || has_class(e, SMALL_CLASSES);
        if e.attr("data-chart").is_some() {
            return self.chart(e);
        }
        if has_class(e, &["callout"]) || name == "aside" {
            return self.callout(e);
        }
        match name {
            _ if IGNORED.contains(&name) => Ok(()),
            "h1" | "h2" | "h3" => {
                let text = self.flat_text(e)?;
                self.blocks.push(Block::Heading {
                    level: name[1..].parse().expect("digit"),
                    text,
                });
                Ok(())
            }
            "p" | "summary" | "figcaption" => {
                let text = self.flat_text(e)?;
                self.paragraph(text, small || name != "p");
                Ok(())
            }
            "ul" | "ol" => {
                let items = self.items(e)?;
                if !items.is_empty() {
                    self.blocks.push(if name == "ol" {
                        Block::Numbered(items)
                    } else {
                        Block::Bullets(items)
                    });
                }
                Ok(())
            }
            "dl" => self.key_values(e),
            "table" => self.table(e),
            "figure" => self.figure(e),
            "footer" => self.container(e, true),
            "details" => self.container(e, small),
            _ if CONTAINERS.contains(&name) => {
                let blocks_inside = e
                    .child_elements()
                    .any(|c| !INLINE.contains(&c.value().name()));
                if blocks_inside {
                    self.container(e, small)
                } else {
                    let text = self.flat_text(e)?;
                    self.paragraph(text, small);
                    Ok(())
                }
            }
            "script" => Err(self.error(e, "cannot be part of a report")),
            "h4" | "h5" | "h6" => {
                Err(self.error(e, "is deeper than the PDF's three heading levels"))
            }
            "svg" | "img" => Err(self.error(
                e,
                "is not a chart the PDF can draw: print charts with {{chart \"name\"}}",
            )),
            _ => Err(self.error(e, "has no meaning in the PDF")),
        }
    }

    /// `li` children of a list, as text; nested lists are not part of the subset.
    fn items(&self, e: ElementRef<'_>) -> Result<Vec<String>, RenderError> {
        let mut items = Vec::new();
        for li in e.child_elements().filter(|c| !skipped(*c)) {
            if li.value().name() != "li" {
                return Err(self.error(li, "is not a list item"));
            }
            items.push(self.flat_text(li)?);
        }
        Ok(items)
    }

    fn key_values(&mut self, e: ElementRef<'_>) -> Result<(), RenderError> {
        let mut kvs: Vec<(String, String)> = Vec::new();
        for c in e.child_elements().filter(|c| !skipped(*c)) {
            match c.value().name() {
                "dt" => kvs.push((self.flat_text(c)?, String::new())),
                "dd" => {
                    let text = self.flat_text(c)?;
                    match kvs.last_mut() {
                        Some((_, v)) if v.is_empty() => *v = text,
                        Some((_, v)) => {
                            v.push('\n');
                            v.push_str(&text);
                        }
                        None => kvs.push((String::new(), text)),
                    }
                }
                "div" => {
                    // HTML allows dt/dd pairs grouped in a div.
                    for g in c.child_elements() {
                        let t = self.flat_text(g)?;
                        match g.value().name() {
                            "dt" => kvs.push((t, String::new())),
                            "dd" => match kvs.last_mut() {
                                Some((_, v)) if v.is_empty() => *v = t,
                                _ => kvs.push((String::new(), t)),
                            },
                            _ => return Err(self.error(g, "is not a dt or dd")),
                        }
                    }
                }
                _ => return Err(self.error(c, "is not a dt or dd")),
            }
        }
        if !kvs.is_empty() {
            self.blocks.push(Block::KeyValues(kvs));
        }
        Ok(())
    }

    fn table(&mut self, e: ElementRef<'_>) -> Result<(), RenderError> {
        let mut header: Vec<String> = Vec::new();
        let mut rows: Vec<Vec<String>> = Vec::new();
        let mut caption = None;
        for part in e.child_elements().filter(|c| !skipped(*c)) {
            match part.value().name() {
                "caption" => caption = Some(self.flat_text(part)?),
                "colgroup" => {}
                "thead" | "tbody" | "tfoot" => {
                    let head = part.value().name() == "thead";
                    for tr in part.child_elements().filter(|c| !skipped(*c)) {
                        self.table_row(tr, head, &mut header, &mut rows)?;
                    }
                }
                "tr" => self.table_row(part, false, &mut header, &mut rows)?,
                _ => return Err(self.error(part, "is not part of a table")),
            }
        }
        if let Some(c) = caption {
            self.paragraph(c, true);
        }
        // A table the template marks `records` (inside an element of that class) is laid out
        // a row at a time, each cell beside its column's name: the follow-up list's seven
        // columns of sentences left each column a few words wide, and a row took most of a
        // page (16 people, 11 pages; now 8).
        let records = e
            .ancestors()
            .filter_map(ElementRef::wrap)
            .any(|a| has_class(a, &["records"]));
        if records {
            for row in rows {
                let kvs: Vec<(String, String)> = header
                    .iter()
                    .zip(row)
                    .filter(|(_, v)| !v.trim().is_empty())
                    .map(|(k, v)| (k.clone(), v))
                    .collect();
                if !kvs.is_empty() {
                    self.blocks.push(Block::KeyValues(kvs));
                }
            }
            return Ok(());
        }
        self.blocks.push(Block::Table {
            header,
            rows,
            widths: Vec::new(),
        });
        Ok(())
    }

    fn table_row(
        &self,
        tr: ElementRef<'_>,
        head: bool,
        header: &mut Vec<String>,
        rows: &mut Vec<Vec<String>>,
    ) -> Result<(), RenderError> {
        if tr.value().name() != "tr" {
            return Err(self.error(tr, "is not a table row"));
        }
        let mut cells = Vec::new();
        for cell in tr.child_elements().filter(|c| !skipped(*c)) {
            if !matches!(cell.value().name(), "th" | "td") {
                return Err(self.error(cell, "is not a table cell"));
            }
            cells.push(self.flat_text(cell)?);
        }
        // The first row of a thead (or a first row of th cells) heads the columns.
        let all_th = tr.child_elements().all(|c| c.value().name() == "th");
        if header.is_empty() && rows.is_empty() && (head || all_th) {
            *header = cells;
        } else {
            rows.push(cells);
        }
        Ok(())
    }

    fn chart(&mut self, e: ElementRef<'_>) -> Result<(), RenderError> {
        let name = e.attr("data-chart").unwrap_or_default();
        let chart = self
            .charts
            .get(name)
            .ok_or_else(|| self.error(e, &format!("names no drawn chart (`{name}`)")))?;
        self.blocks.push(Block::Chart(chart.clone()));
        Ok(())
    }

    /// A figure: its chart(s) and other content in order; the caption is shown under the
    /// chart as small text and is the chart's text alternative in the structure tree.
    fn figure(&mut self, e: ElementRef<'_>) -> Result<(), RenderError> {
        let start = self.blocks.len();
        self.container(e, false)?;
        let caption = e
            .child_elements()
            .find(|c| c.value().name() == "figcaption")
            .map(|c| self.flat_text(c))
            .transpose()?;
        if let Some(alt) = caption.filter(|a| !a.is_empty()) {
            for b in &mut self.blocks[start..] {
                if let Block::Chart(c) = b {
                    c.set_alt_text(&alt);
                }
            }
        }
        Ok(())
    }

    /// A boxed note: its first heading is the box's title, the rest its text (lists as
    /// bulleted lines, a `details` as "summary: content").
    fn callout(&mut self, e: ElementRef<'_>) -> Result<(), RenderError> {
        let tone = if has_class(e, &["caution", "warning"]) {
            Tone::Caution
        } else {
            Tone::Info
        };
        let mut title = String::new();
        let mut lines: Vec<String> = Vec::new();
        for c in e.children() {
            let Some(ce) = ElementRef::wrap(c) else {
                if let Node::Text(t) = c.value() {
                    let t = collapse(t);
                    if !t.trim().is_empty() {
                        lines.push(t.trim().to_string());
                    }
                }
                continue;
            };
            if skipped(ce) {
                continue;
            }
            match ce.value().name() {
                "h1" | "h2" | "h3" if title.is_empty() && lines.is_empty() => {
                    title = self.flat_text(ce)?
                }
                "ul" | "ol" => {
                    let ordered = ce.value().name() == "ol";
                    for (i, item) in self.items(ce)?.into_iter().enumerate() {
                        lines.push(if ordered {
                            format!("{}. {item}", i + 1)
                        } else {
                            format!("• {item}")
                        });
                    }
                }
                "details" => {
                    let summary = ce
                        .child_elements()
                        .find(|s| s.value().name() == "summary")
                        .map(|s| self.flat_text(s))
                        .transpose()?
                        .unwrap_or_default();
                    let mut body = Vec::new();
                    for d in ce
                        .child_elements()
                        .filter(|d| d.value().name() != "summary")
                    {
                        body.push(self.flat_text(d)?);
                    }
                    let body = body.join(" ");
                    lines.push(if summary.is_empty() {
                        body
                    } else {
                        format!("{summary}: {body}")
                    });
                }
                "p" | "div" | "h1" | "h2" | "h3" => lines.push(self.flat_text(ce)?),
                n if INLINE.contains(&n) => lines.push(self.inline(ce)?.trim().to_string()),
                _ => return Err(self.error(ce, "is not allowed in a callout")),
            }
        }
        lines.retain(|l| !l.is_empty());
        if title.is_empty() && lines.is_empty() {
            return Ok(());
        }
        self.blocks.push(Block::Callout {
            tone,
            title,
            text: lines.join("\n"),
        });
        Ok(())
    }
}

/// The text a reader sees both on screen and in the PDF: the page's text outside comments,
/// `<head>` and the other elements with no content for a reader, content for one medium only
/// (`screen-only`, `print-only`, the narrow chart), and content hidden by `hidden`,
/// `aria-hidden="true"` or an inline `display: none` / `visibility: hidden`. White space is
/// collapsed to single spaces. (A style sheet of a template's own can still hide an element
/// by its class; that is not seen here.)
pub fn shown_text(html: &str) -> String {
    fn walk(n: NodeRef<'_, Node>, out: &mut String) {
        match n.value() {
            Node::Text(t) => {
                out.push_str(t);
                out.push(' ');
            }
            Node::Element(el) => {
                let e = ElementRef::wrap(n).expect("element");
                let style = el
                    .attr("style")
                    .unwrap_or("")
                    .to_ascii_lowercase()
                    .replace(char::is_whitespace, "");
                if IGNORED.contains(&el.name())
                    || el.name() == "script"
                    || skipped(e)
                    || has_class(e, &["print-only"])
                    || style.contains("display:none")
                    || style.contains("visibility:hidden")
                {
                    return;
                }
                for c in n.children() {
                    walk(c, out);
                }
            }
            _ => {
                for c in n.children() {
                    walk(c, out);
                }
            }
        }
    }
    let doc = Html::parse_document(html);
    let mut out = String::new();
    walk(doc.tree.root(), &mut out);
    out.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Left out of the PDF: screen-only content, hidden content.
fn skipped(e: ElementRef<'_>) -> bool {
    has_class(e, SCREEN_ONLY) || e.attr("hidden").is_some() || e.attr("aria-hidden") == Some("true")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn blocks(html: &str) -> Result<Vec<Block>, RenderError> {
        convert(html, "test.html.hbs", &BTreeMap::new()).map(|p| p.blocks)
    }

    #[test]
    fn the_subset_maps_to_blocks() {
        let b = blocks(
            "<html lang=\"de\"><head><title>T  x</title><style>p{}</style></head><body><main>\
             <header><div class=\"program\">Prog · May</div><h1>Name</h1></header>\
             <p class=\"lead\">Lead <b>bold</b> text</p>\
             <section><h2>Where</h2><dl><dt>A</dt><dd>1</dd><dt>B</dt><dd>2</dd></dl>\
             <ul><li>one</li><li><span>two</span></li></ul><ol><li>x</li></ol></section>\
             <p class=\"small\">note</p><small>aside</small>\
             <div class=\"table-wrap\"><table><thead><tr><th scope=\"col\">H</th><td></td></tr></thead>\
             <tbody><tr><th scope=\"row\">r</th><td>v</td></tr></tbody></table></div>\
             <nav>Sections: <a href=\"#a\">a</a></nav>\
             <p class=\"screen-only\">only on screen</p>\
             <section class=\"callout caution\"><h3>Please read</h3><ul><li>c1</li><li>c2</li></ul></section>\
             <footer>Foot<br>line two</footer></main></body></html>",
        )
        .unwrap();
        assert_eq!(
            b,
            vec![
                Block::Small("Prog · May".into()),
                Block::Heading {
                    level: 1,
                    text: "Name".into()
                },
                Block::Paragraph("Lead bold text".into()),
                Block::Heading {
                    level: 2,
                    text: "Where".into()
                },
                Block::KeyValues(vec![("A".into(), "1".into()), ("B".into(), "2".into())]),
                Block::Bullets(vec!["one".into(), "two".into()]),
                Block::Numbered(vec!["x".into()]),
                Block::Small("note".into()),
                Block::Small("aside".into()),
                Block::Table {
                    header: vec!["H".into(), String::new()],
                    rows: vec![vec!["r".into(), "v".into()]],
                    widths: vec![],
                },
                Block::Callout {
                    tone: Tone::Caution,
                    title: "Please read".into(),
                    text: "• c1\n• c2".into(),
                },
                Block::Small("Foot\nline two".into()),
            ]
        );
        let page = convert(
            "<html lang=\"de\"><title>T  x</title></html>",
            "t",
            &BTreeMap::new(),
        )
        .unwrap();
        assert_eq!((page.title.as_str(), page.lang.as_str()), ("T x", "de"));
    }

    #[test]
    fn elements_outside_the_subset_are_errors_naming_template_and_element() {
        for (html, element) in [
            ("<body><h4>deep</h4></body>", "<h4>"),
            (
                "<body><img alt=\"x\" src=\"#a\"></body>",
                "<img alt=\"x\" src=\"#a\">",
            ),
            (
                "<body><h2>a <span><img alt=\"\"></span></h2></body>",
                "<img",
            ),
            (
                "<body><ul><li>a<table><tr><td>b</td></tr></table></li></ul></body>",
                "<table>",
            ),
            (
                "<body><ul><li>a<ul><li>b</li></ul></li></ul></body>",
                "<ul>",
            ),
            ("<body><form></form></body>", "<form>"),
            ("<body><script>1</script></body>", "<script>"),
            (
                "<body><figure><div data-chart=\"nope\"></div></figure></body>",
                "data-chart",
            ),
        ] {
            let err = blocks(html).unwrap_err().to_string();
            assert!(err.contains("test.html.hbs"), "{html}: {err}");
            assert!(err.contains(element), "{html}: {err}");
        }
    }

    #[test]
    fn a_figure_caption_becomes_the_charts_text_alternative() {
        let chart = crate::render::chart::tests::sample_line();
        let mut charts = BTreeMap::new();
        charts.insert("w".to_string(), chart);
        let page = convert(
            "<body><figure><div class=\"chart\" data-chart=\"w\"><div class=\"chart-wide\"><svg></svg></div>\
             <div class=\"chart-narrow\"><svg></svg></div></div>\
             <figcaption>Weight, falling.</figcaption></figure></body>",
            "t",
            &charts,
        )
        .unwrap();
        assert_eq!(page.blocks.len(), 2);
        match &page.blocks[0] {
            Block::Chart(c) => assert_eq!(c.alt_text(), "Weight, falling."),
            b => panic!("{b:?}"),
        }
        assert_eq!(page.blocks[1], Block::Small("Weight, falling.".into()));
    }

    /// A table inside an element of class `records` is laid out a row at a time: one
    /// key-value block per row, each cell beside its column's heading, empty cells left out.
    #[test]
    fn a_records_table_becomes_one_block_per_row() {
        let html = "<html><body><main><div class=\"table-wrap stack records\"><table>\
                    <thead><tr><th scope=\"col\">Who</th><th scope=\"col\">Why</th></tr></thead>\
                    <tbody><tr><td>A</td><td>first reason</td></tr><tr><td>B</td><td></td></tr></tbody>\
                    </table></div><div class=\"table-wrap stack\"><table>\
                    <thead><tr><th scope=\"col\">H</th></tr></thead><tbody><tr><td>x</td></tr></tbody>\
                    </table></div></main></body></html>";
        assert_eq!(
            blocks(html).unwrap(),
            vec![
                Block::KeyValues(vec![
                    ("Who".into(), "A".into()),
                    ("Why".into(), "first reason".into())
                ]),
                Block::KeyValues(vec![("Who".into(), "B".into())]),
                Block::Table {
                    header: vec!["H".into()],
                    rows: vec![vec!["x".into()]],
                    widths: vec![],
                },
            ]
        );
    }
}

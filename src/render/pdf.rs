//! Report documents rendered to PDF: a small block model (headings, paragraphs, key–value
//! lists, bullets, tables, charts, callouts) laid out on A4 pages with printpdf.
//!
//! - Text is wrapped by the real advance widths of the embedded DejaVu Sans faces, and the faces
//!   are embedded as subsets holding only the glyphs the document uses.
//! - Every page carries the document header and a footer with "page N of M".
//! - Tables continue across pages with their header row repeated.
//! - Charts are vector graphics drawn by the same plotters code as the HTML charts.
//! - Output is deterministic: the same [`Document`] always gives the same bytes (document id
//!   from [`Document::id_seed`], dates from [`Document::created`], no clock, no randomness).
//!
//! [`render_pdf`] returns bytes and never touches the file system.

use super::plotters_pdf::r2;
use std::collections::{BTreeMap, BTreeSet};
use std::io::Write as _;

use chrono::NaiveDateTime;
use lopdf::{Object, StringFormat};
use printpdf::{
    Color, FontId, Line, LinePoint, Mm, Op, PaintMode, PdfDocument, PdfFont, PdfFontHandle,
    PdfPage, PdfSaveOptions, Point, Pt, Rect, Rgb, TextItem, TextMatrix,
};

use super::chart::Chart;
use super::font::{self, Face};
use super::plotters_pdf;
use super::tagged::{self, Tags};

/// A report document, independent of the page.
#[derive(Debug, Clone, PartialEq)]
pub struct Document {
    /// Document title (PDF metadata).
    pub title: String,
    /// Document subject (PDF metadata).
    pub subject: String,
    /// Document author (PDF metadata).
    pub author: String,
    /// Running header, top left of every page.
    pub header: String,
    /// Running footer, bottom left of every page ("page N of M" goes bottom right).
    pub footer: String,
    /// Natural language of the content (BCP 47, e.g. `en`): the catalog's /Lang.
    pub lang: String,
    pub blocks: Vec<Block>,
    /// Creation date written into the metadata; set by the caller so output is reproducible.
    pub created: NaiveDateTime,
    /// The PDF document id is derived from this (e.g. participant id + period), not random.
    pub id_seed: String,
}

/// One piece of document content, laid out top to bottom.
#[derive(Debug, Clone, PartialEq)]
pub enum Block {
    /// Level 1 (largest) to 3.
    Heading {
        level: u8,
        text: String,
    },
    Paragraph(String),
    /// Smaller grey text (notes, sources, disclaimers).
    Small(String),
    /// Two aligned columns: label and value.
    KeyValues(Vec<(String, String)>),
    Bullets(Vec<String>),
    /// A numbered list.
    Numbered(Vec<String>),
    /// A table; `widths` are relative column widths (empty = from the cells' text).
    Table {
        header: Vec<String>,
        rows: Vec<Vec<String>>,
        widths: Vec<f32>,
    },
    Chart(Chart),
    /// A boxed note with a title (tagged as a level-3 heading) and text.
    Callout {
        tone: Tone,
        title: String,
        text: String,
    },
    /// Start a new page (ignored at the top of a page).
    // Laid out and tested here (pagination tests); no report asks for one yet.
    #[allow(dead_code)]
    PageBreak,
}

/// The tint of a [`Block::Callout`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Tone {
    Info,
    Caution,
}

/// Why a PDF could not be produced.
#[derive(Debug, thiserror::Error)]
pub enum PdfError {
    #[error("cannot embed the report font: {0}")]
    Font(String),
    #[error("cannot write the PDF: {0}")]
    Write(String),
}

// ---- page geometry (points; 1 mm = 72 / 25.4 pt) --------------------------------------------

const MM: f32 = 72.0 / 25.4;
const PAGE_W: f32 = 210.0 * MM;
const PAGE_H: f32 = 297.0 * MM;
const MARGIN_X: f32 = 18.0 * MM;
const CONTENT_W: f32 = PAGE_W - 2.0 * MARGIN_X;
const CONTENT_TOP: f32 = PAGE_H - 20.0 * MM;
const CONTENT_BOTTOM: f32 = 20.0 * MM;

const BODY: f32 = 10.0;
const SMALL: f32 = 8.5;
const TABLE: f32 = 9.0;
const RUNNING: f32 = 8.0;
/// Line height as a multiple of the font size.
const LEADING: f32 = 1.38;
/// DejaVu Sans ascender, 1901/2048 em (hhea): baseline offset below the top of a line box.
const ASCENT: f32 = 0.93;

fn grey(v: f32) -> Color {
    Color::Rgb(Rgb::new(v, v, v, None))
}

fn rgb(r: u8, g: u8, b: u8) -> Color {
    Color::Rgb(Rgb::new(
        f32::from(r) / 255.0,
        f32::from(g) / 255.0,
        f32::from(b) / 255.0,
        None,
    ))
}

fn ink() -> Color {
    grey(0.13)
}
fn muted() -> Color {
    grey(0.40)
}
fn rule() -> Color {
    grey(0.78)
}

/// Callout tints: Okabe–Ito blue and vermillion for the bar, very light tints for the box.
fn tone_colours(tone: Tone) -> (Color, Color) {
    match tone {
        Tone::Info => (rgb(0x00, 0x72, 0xB2), rgb(0xE8, 0xF2, 0xF9)),
        Tone::Caution => (rgb(0xD5, 0x5E, 0x00), rgb(0xFC, 0xEF, 0xE3)),
    }
}

// ---- primitive operations -------------------------------------------------------------------

fn push_text(
    ops: &mut Vec<Op>,
    face: Face,
    size: f32,
    colour: Color,
    x: f32,
    baseline: f32,
    s: &str,
) {
    if s.is_empty() {
        return;
    }
    // Control characters have no glyph; show them as spaces. Direction controls and marks
    // are dropped (`super::neutralise`).
    let s = super::neutralise(s);
    let s: std::borrow::Cow<'_, str> = if s.chars().any(char::is_control) {
        s.chars()
            .map(|c| if c.is_control() { ' ' } else { c })
            .collect::<String>()
            .into()
    } else {
        s
    };
    ops.extend([
        Op::StartTextSection,
        Op::SetFont {
            font: PdfFontHandle::External(FontId(face.resource_name().to_string())),
            size: Pt(size),
        },
        Op::SetFillColor { col: colour },
        Op::SetTextMatrix {
            matrix: TextMatrix::Translate(Pt(r2(x)), Pt(r2(baseline))),
        },
        Op::ShowText {
            items: vec![TextItem::Text(s.into_owned())],
        },
        Op::EndTextSection,
    ]);
}

fn push_fill_rect(ops: &mut Vec<Op>, colour: Color, x: f32, y_top: f32, w: f32, h: f32) {
    ops.push(Op::SetFillColor { col: colour });
    ops.push(Op::DrawRectangle {
        rectangle: Rect {
            x: Pt(r2(x)),
            y: Pt(r2(y_top - h)),
            width: Pt(r2(w)),
            height: Pt(r2(h)),
            mode: Some(PaintMode::Fill),
            winding_order: None,
        },
    });
}

fn push_hrule(ops: &mut Vec<Op>, colour: Color, width: f32, x0: f32, x1: f32, y: f32) {
    let p = |x: f32| LinePoint {
        p: Point {
            x: Pt(r2(x)),
            y: Pt(r2(y)),
        },
        bezier: false,
    };
    ops.push(Op::SetOutlineColor { col: colour });
    ops.push(Op::SetOutlineThickness { pt: Pt(width) });
    ops.push(Op::DrawLine {
        line: Line {
            points: vec![p(x0), p(x1)],
            is_closed: false,
        },
    });
}

// ---- text wrapping --------------------------------------------------------------------------

/// Breaks `text` into lines no wider than `width` at `size`, at spaces; a word longer than a
/// line is broken between characters. Explicit newlines are kept.
/// The words of `para` as lines may break between them: a word that begins with `%` stays with
/// the number before it (`95 %`, `5.1 %`, `−4.8 %`), so no line begins with a lone percent sign.
fn words(para: &str) -> Vec<String> {
    let mut out: Vec<String> = Vec::new();
    for w in para.split_whitespace() {
        match out.last_mut() {
            Some(prev) if w.starts_with('%') => {
                prev.push(' ');
                prev.push_str(w);
            }
            _ => out.push(w.to_string()),
        }
    }
    out
}

fn wrap(text: &str, face: Face, size: f32, width: f32) -> Vec<String> {
    let m = font::face(face);
    let space = m.char_width(' ', size);
    let mut lines = Vec::new();
    for para in text.split('\n') {
        let mut line = String::new();
        let mut line_w = 0.0f32;
        for word in words(para) {
            let word = word.as_str();
            let word_w = m.width(word, size);
            let needed = if line.is_empty() {
                word_w
            } else {
                line_w + space + word_w
            };
            if needed <= width {
                if !line.is_empty() {
                    line.push(' ');
                }
                line.push_str(word);
                line_w = needed;
                continue;
            }
            if !line.is_empty() {
                lines.push(std::mem::take(&mut line));
                line_w = 0.0;
            }
            if word_w <= width {
                line.push_str(word);
                line_w = word_w;
            } else {
                for c in word.chars() {
                    let cw = m.char_width(c, size);
                    if line_w + cw > width && !line.is_empty() {
                        lines.push(std::mem::take(&mut line));
                        line_w = 0.0;
                    }
                    line.push(c);
                    line_w += cw;
                }
            }
        }
        lines.push(line);
    }
    // Drop trailing empty lines from trailing newlines, but keep at least one line.
    while lines.len() > 1 && lines.last().is_some_and(|l| l.is_empty()) {
        lines.pop();
    }
    lines
}

/// Shortens `s` with an ellipsis to fit `width`.
fn truncate(s: &str, face: Face, size: f32, width: f32) -> String {
    font::ellipsize(face, s, size, width)
}

// ---- layout ---------------------------------------------------------------------------------

/// Pages being filled, top to bottom.
struct Layout {
    pages: Vec<Vec<Op>>,
    /// Top of the free space on the current page.
    y: f32,
    /// The logical structure drawn so far (tagged PDF).
    tags: Tags,
}

impl Layout {
    fn new() -> Self {
        Layout {
            pages: vec![Vec::with_capacity(512)],
            y: CONTENT_TOP,
            tags: Tags::default(),
        }
    }

    fn ops(&mut self) -> &mut Vec<Op> {
        self.pages.last_mut().expect("layout always has a page")
    }

    fn at_top(&self) -> bool {
        self.y >= CONTENT_TOP - 0.01
    }

    fn new_page(&mut self) {
        self.pages.push(Vec::with_capacity(512));
        self.tags.new_page();
        self.y = CONTENT_TOP;
    }

    /// One line of real content: text in a marked-content sequence of the current structure
    /// element.
    fn text(&mut self, face: Face, size: f32, colour: Color, x: f32, baseline: f32, s: &str) {
        let page = self.pages.last_mut().expect("layout always has a page");
        self.tags.begin_content(page);
        push_text(page, face, size, colour, x, baseline, s);
        Tags::end_content(page);
    }

    /// Decoration (rules, fills): drawn as an artifact, outside the structure.
    fn decoration(&mut self, draw: impl FnOnce(&mut Vec<Op>)) {
        let page = self.ops();
        tagged::begin_artifact(page);
        draw(page);
        tagged::end_artifact(page);
    }

    fn remaining(&self) -> f32 {
        self.y - CONTENT_BOTTOM
    }

    /// Starts a new page unless `h` fits (or the page is empty: then nothing would help).
    fn ensure(&mut self, h: f32) {
        if h > self.remaining() + 0.01 && !self.at_top() {
            self.new_page();
        }
    }

    /// Vertical gap that disappears at the top of a page.
    fn gap(&mut self, h: f32) {
        if !self.at_top() {
            self.y -= h;
        }
    }

    /// Lines of text with page breaks between lines as needed.
    fn lines(&mut self, lines: &[String], face: Face, size: f32, colour: &Color, x: f32) {
        let lh = size * LEADING;
        for l in lines {
            self.ensure(lh);
            let baseline = self.y - size * ASCENT;
            self.text(face, size, colour.clone(), x, baseline, l);
            self.y -= lh;
        }
    }

    /// A heading, kept on one page with the first `keep` points of what follows.
    fn heading(&mut self, level: u8, text: &str, keep: f32) {
        let size = match level {
            0 | 1 => 17.0,
            2 => 13.0,
            _ => 11.0,
        };
        let lines = wrap(text, Face::Bold, size, CONTENT_W);
        let lh = size * 1.25;
        self.gap(size * 0.7);
        self.ensure(lh * lines.len() as f32 + keep);
        self.tags.open(match level {
            0 | 1 => "H1",
            2 => "H2",
            _ => "H3",
        });
        for l in &lines {
            // A heading taller than a page (a name of thousands of letters, an override
            // template's long title) goes on over the page break; it was drawn on down over
            // the running footer and off the page.
            self.ensure(lh);
            let baseline = self.y - size * ASCENT;
            self.text(Face::Bold, size, ink(), MARGIN_X, baseline, l);
            self.y -= lh;
        }
        self.tags.close();
        if level <= 1 {
            let y = self.y - 1.5;
            self.decoration(|ops| push_hrule(ops, rule(), 0.6, MARGIN_X, MARGIN_X + CONTENT_W, y));
            self.y -= 4.0;
        }
        self.y -= size * 0.3;
    }

    /// A paragraph whose last two lines stay on one page with the next `tail` points (none
    /// when `tail` is 0).
    fn paragraph(&mut self, text: &str, size: f32, colour: Color, tail: f32) {
        let lines = wrap(text, Face::Regular, size, CONTENT_W);
        self.tags.open("P");
        let kept = if tail > 0.0 { lines.len().min(2) } else { 0 };
        let (body, last) = lines.split_at(lines.len() - kept);
        self.lines(body, Face::Regular, size, &colour, MARGIN_X);
        if kept > 0 {
            self.ensure(kept as f32 * size * LEADING + size * 0.6 + tail);
        }
        self.lines(last, Face::Regular, size, &colour, MARGIN_X);
        self.tags.close();
        self.y -= size * 0.6;
    }

    /// A two-column block; its last row stays on one page with the next `tail` points.
    fn key_values(&mut self, kvs: &[(String, String)], tail: f32) {
        let key_w = key_width(kvs);
        let val_x = MARGIN_X + key_w;
        let val_w = CONTENT_W - key_w;
        let lh = BODY * LEADING;
        let wrapped: Vec<(Vec<String>, Vec<String>)> = kvs
            .iter()
            .map(|(k, v)| {
                (
                    wrap(k, Face::Regular, BODY, key_w - 10.0),
                    wrap(v, Face::Regular, BODY, val_w),
                )
            })
            .collect();
        // A short block (a record of the follow-up list) is kept on one page: its last line
        // alone on the next page belonged to the record above it.
        let total: usize = wrapped.iter().map(|(k, v)| k.len().max(v.len())).sum();
        if total <= KEEP_TOGETHER_LINES {
            self.ensure(lh * total as f32);
        }
        // A two-column table to assistive technology: each label heads its row.
        self.tags.open("Table");
        for (n, (kl, vl)) in wrapped.iter().enumerate() {
            let rows = kl.len().max(vl.len());
            // Rows are short; keep each together (the last with what must follow it).
            let after = if n + 1 == wrapped.len() && tail > 0.0 {
                BODY * 0.6 + tail
            } else {
                0.0
            };
            self.ensure(lh * rows as f32 + after);
            let top = self.y;
            self.tags.open("TR");
            self.tags.open_header_cell("Row");
            for (i, k) in kl.iter().enumerate() {
                let baseline = top - i as f32 * lh - BODY * ASCENT;
                self.text(Face::Regular, BODY, muted(), MARGIN_X, baseline, k);
            }
            self.tags.close();
            self.tags.open("TD");
            for (i, v) in vl.iter().enumerate() {
                let baseline = top - i as f32 * lh - BODY * ASCENT;
                self.text(Face::Regular, BODY, ink(), val_x, baseline, v);
            }
            self.tags.close();
            self.tags.close();
            self.y = top - lh * rows as f32;
        }
        self.tags.close();
        self.y -= BODY * 0.6;
    }

    /// A list; its last line stays on one page with the next `tail` points (its last item
    /// whole when that is short).
    fn bullets(&mut self, items: &[String], numbered: bool, tail: f32) {
        let indent = if numbered { 18.0 } else { 13.0 };
        let lh = BODY * LEADING;
        self.tags.open("L");
        for (n, item) in items.iter().enumerate() {
            let label = if numbered {
                format!("{}.", n + 1)
            } else {
                "•".to_string()
            };
            let lines = wrap(item, Face::Regular, BODY, CONTENT_W - indent);
            let after = if n + 1 == items.len() && tail > 0.0 {
                1.5 + BODY * 0.5 + tail
            } else {
                0.0
            };
            // Keep short items together; long ones may break between lines.
            if lines.len() <= 4 {
                self.ensure(lh * lines.len() as f32 + after);
            }
            self.tags.open("LI");
            for (i, l) in lines.iter().enumerate() {
                self.ensure(lh + if i + 1 == lines.len() { after } else { 0.0 });
                let baseline = self.y - BODY * ASCENT;
                if i == 0 {
                    self.tags.open("Lbl");
                    self.text(
                        Face::Regular,
                        BODY,
                        muted(),
                        MARGIN_X + 2.0,
                        baseline,
                        &label,
                    );
                    self.tags.close();
                    self.tags.open("LBody");
                }
                self.text(Face::Regular, BODY, ink(), MARGIN_X + indent, baseline, l);
                self.y -= lh;
            }
            if !lines.is_empty() {
                self.tags.close();
            }
            self.tags.close();
            self.y -= 1.5;
        }
        self.tags.close();
        self.y -= BODY * 0.5;
    }

    /// A table; it starts on a page with its header and first [`KEEP_ROWS`] rows, and its last
    /// row stays on one page with the next `tail` points.
    fn table(&mut self, header: &[String], rows: &[Vec<String>], widths: &[f32], tail: f32) {
        let ncols = column_count(header, rows);
        if ncols == 0 {
            return;
        }
        let col_w = column_widths(header, rows, widths, ncols);
        let col_x: Vec<f32> = col_w
            .iter()
            .scan(MARGIN_X, |x, w| {
                let this = *x;
                *x += w;
                Some(this)
            })
            .collect();
        let pad_y = 3.0;
        let lh = TABLE * 1.3;
        let wrap_row = |cells: &[String], face: Face| -> Vec<Vec<String>> {
            (0..ncols)
                .map(|i| {
                    let text = cells.get(i).map(String::as_str).unwrap_or("");
                    wrap_cell(text, face, col_w[i])
                })
                .collect()
        };
        let row_h = |cells: &[Vec<String>]| -> f32 {
            cells.iter().map(Vec::len).max().unwrap_or(1) as f32 * lh + 2.0 * pad_y
        };
        let header_cells = if header.is_empty() {
            None
        } else {
            Some(wrap_row(header, Face::Bold))
        };
        let header_h = header_cells.as_ref().map_or(0.0, |h| row_h(h));

        // `header`: the first header row is the table's real header (TH cells); a header
        // repeated on a continuation page is an artifact, as it is only a reading aid there.
        #[derive(PartialEq)]
        enum RowKind {
            Header,
            RepeatedHeader,
            Body,
        }
        let draw_row = |layout: &mut Layout,
                        cells: &[Vec<String>],
                        face: Face,
                        fill: Option<Color>,
                        h: f32,
                        kind: RowKind| {
            let y = layout.y;
            if let Some(fill) = fill {
                layout.decoration(|ops| push_fill_rect(ops, fill, MARGIN_X, y, CONTENT_W, h));
            }
            if kind == RowKind::RepeatedHeader {
                let ops = layout.ops();
                tagged::begin_artifact(ops);
                for (i, lines) in cells.iter().enumerate() {
                    for (j, l) in lines.iter().enumerate() {
                        let baseline =
                            y - pad_y - j as f32 * lh - TABLE * ASCENT - (lh - TABLE) / 2.0;
                        push_text(ops, face, TABLE, ink(), col_x[i] + CELL_PAD_X, baseline, l);
                    }
                }
                tagged::end_artifact(ops);
            } else {
                layout.tags.open("TR");
                for (i, lines) in cells.iter().enumerate() {
                    if kind == RowKind::Header {
                        layout.tags.open_header_cell("Column");
                    } else {
                        layout.tags.open("TD");
                    }
                    for (j, l) in lines.iter().enumerate() {
                        let baseline =
                            y - pad_y - j as f32 * lh - TABLE * ASCENT - (lh - TABLE) / 2.0;
                        layout.text(face, TABLE, ink(), col_x[i] + CELL_PAD_X, baseline, l);
                    }
                    layout.tags.close();
                }
                layout.tags.close();
            }
            layout.decoration(|ops| {
                push_hrule(ops, grey(0.86), 0.4, MARGIN_X, MARGIN_X + CONTENT_W, y - h)
            });
            layout.y -= h;
        };
        let draw_header = |layout: &mut Layout, kind: RowKind| {
            if let Some(h) = &header_cells {
                draw_row(layout, h, Face::Bold, Some(grey(0.92)), header_h, kind);
            }
        };

        let body: Vec<Vec<Vec<String>>> = rows.iter().map(|r| wrap_row(r, Face::Regular)).collect();
        // Not one row alone at a page's foot: the header and the first rows start together
        // (all of them when the table has no more).
        let first_h: f32 = body.iter().take(KEEP_ROWS).map(|r| row_h(r)).sum();
        self.ensure(header_h + first_h);
        self.tags.open("Table");
        draw_header(self, RowKind::Header);
        for (n, cells) in body.iter().enumerate() {
            let h = row_h(cells);
            // The last row is not left alone under a repeated header either: the one before it
            // goes along.
            let after_last = if tail > 0.0 { BODY * 0.9 + tail } else { 0.0 };
            let after = if n + 1 == body.len() {
                after_last
            } else if n + 2 == body.len() && n > 0 {
                row_h(&body[n + 1]) + after_last
            } else {
                0.0
            };
            if h + after > self.remaining() + 0.01 && !self.at_top() {
                self.new_page();
                draw_header(self, RowKind::RepeatedHeader);
            }
            let fill = (n % 2 == 1).then(|| grey(0.975));
            draw_row(self, cells, Face::Regular, fill, h, RowKind::Body);
        }
        self.tags.close();
        self.y -= BODY * 0.9;
    }

    fn chart(&mut self, chart: &Chart) {
        let (w, h) = chart.pdf_canvas();
        let height = CONTENT_W * h as f32 / w as f32;
        self.gap(2.0);
        self.ensure(height);
        let top = self.y;
        self.tags.open_figure(chart.alt_text());
        let page = self.pages.last_mut().expect("layout always has a page");
        self.tags.begin_content(page);
        let used = plotters_pdf::draw_chart(page, chart, MARGIN_X, top, CONTENT_W);
        Tags::end_content(page);
        self.tags.close();
        self.y -= used + BODY * 0.8;
    }

    fn callout(&mut self, tone: Tone, title: &str, text: &str) {
        let (bar, tint) = tone_colours(tone);
        let pad = CALLOUT_PAD;
        let bar_w = CALLOUT_BAR;
        let inner_x = MARGIN_X + bar_w + pad;
        let inner_w = CONTENT_W - bar_w - 2.0 * pad;
        let lh = BODY * LEADING;
        let lines = callout_lines(title, text, inner_w);
        if lines.is_empty() {
            return;
        }
        self.gap(2.0);
        self.tags.open("Div");
        // The title (bold lines) is the box's heading, level 3 as in the HTML; the text a P.
        let title_lines = lines.iter().take_while(|(f, _)| *f == Face::Bold).count();
        let mut done = 0;
        let mut open: Option<&str> = None;
        let mut rest = &lines[..];
        while !rest.is_empty() {
            let fit = ((self.remaining() - 2.0 * pad) / lh).floor().max(0.0) as usize;
            // Move the whole box to the next page if it would fit there, or if fewer than two
            // lines fit here.
            let whole_h = rest.len() as f32 * lh + 2.0 * pad;
            if !self.at_top()
                && (fit < rest.len().min(2)
                    || (fit < rest.len() && whole_h <= CONTENT_TOP - CONTENT_BOTTOM))
            {
                self.new_page();
                continue;
            }
            let n = fit.clamp(1, rest.len());
            let h = n as f32 * lh + 2.0 * pad;
            let y = self.y;
            self.decoration(|ops| {
                push_fill_rect(ops, tint.clone(), MARGIN_X, y, CONTENT_W, h);
                push_fill_rect(ops, bar.clone(), MARGIN_X, y, bar_w, h);
            });
            for (i, (face, l)) in rest[..n].iter().enumerate() {
                let role = if done + i < title_lines { "H3" } else { "P" };
                if open != Some(role) {
                    if open.is_some() {
                        self.tags.close();
                    }
                    self.tags.open(role);
                    open = Some(role);
                }
                let baseline = y - pad - i as f32 * lh - BODY * ASCENT;
                self.text(*face, BODY, ink(), inner_x, baseline, l);
            }
            done += n;
            self.y -= h;
            rest = &rest[n..];
            if !rest.is_empty() {
                self.new_page();
            }
        }
        if open.is_some() {
            self.tags.close();
        }
        self.tags.close();
        self.y -= BODY * 0.9;
    }

    /// Lays out `b`; `rest` are the blocks after it (a heading stays with the start of what
    /// follows it, a block's end with a box that follows it).
    fn block(&mut self, b: &Block, rest: &[Block]) {
        let next = rest.first();
        // A box moves to the next page whole when it fits there (see `callout`); the end of
        // the block before it goes along, so the box never stands alone on a page (the group
        // report's last page held only its "Please read" box).
        let tail = match next {
            Some(Block::Callout { title, text, .. }) => {
                Some(callout_height(title, text)).filter(|h| *h <= CONTENT_TOP - CONTENT_BOTTOM)
            }
            _ => None,
        }
        .unwrap_or(0.0);
        match b {
            Block::Heading { level, text } => {
                // A heading stays on one page with the start of what follows: a chart whole
                // (it is not split), a table's header and first rows, and the start of a
                // heading below it with what that one keeps (the group report's page that
                // ended with "Methods" and one row, or a site's two headings and one row).
                let keep = start_height(rest);
                self.heading(*level, text, keep)
            }
            Block::Paragraph(t) => self.paragraph(t, BODY, ink(), tail),
            Block::Small(t) => {
                // A note that introduces a table (a caption, "Data behind the chart") stays on
                // a page with the table's header and first rows.
                if matches!(next, Some(Block::Table { .. })) {
                    self.ensure(start_height(std::slice::from_ref(b)) + start_height(rest));
                }
                self.paragraph(t, SMALL, muted(), tail)
            }
            Block::KeyValues(kvs) => self.key_values(kvs, tail),
            Block::Bullets(items) => self.bullets(items, false, tail),
            Block::Numbered(items) => self.bullets(items, true, tail),
            Block::Table {
                header,
                rows,
                widths,
            } => self.table(header, rows, widths, tail),
            Block::Chart(c) => self.chart(c),
            Block::Callout { tone, title, text } => self.callout(*tone, title, text),
            Block::PageBreak => {
                if !self.at_top() {
                    self.new_page();
                }
            }
        }
    }
}

/// Rows of a table kept on a page with its header where it starts (program choice, as the three
/// lines kept under a heading).
const KEEP_ROWS: usize = 3;

/// Inner padding of a callout box, pt.
const CALLOUT_PAD: f32 = 7.0;
/// Width of a callout box's coloured bar, pt.
const CALLOUT_BAR: f32 = 3.0;

/// The lines of a callout box whose text is `inner_w` wide: the title's, bold, then the text's.
fn callout_lines(title: &str, text: &str, inner_w: f32) -> Vec<(Face, String)> {
    let mut lines: Vec<(Face, String)> = Vec::new();
    if !title.is_empty() {
        lines.extend(
            wrap(title, Face::Bold, BODY, inner_w)
                .into_iter()
                .map(|l| (Face::Bold, l)),
        );
    }
    if !text.is_empty() {
        lines.extend(
            wrap(text, Face::Regular, BODY, inner_w)
                .into_iter()
                .map(|l| (Face::Regular, l)),
        );
    }
    lines
}

/// The height a whole callout box takes, its gap above included, pt.
fn callout_height(title: &str, text: &str) -> f32 {
    let inner_w = CONTENT_W - CALLOUT_BAR - 2.0 * CALLOUT_PAD;
    let n = callout_lines(title, text, inner_w).len();
    if n == 0 {
        return 0.0;
    }
    2.0 + n as f32 * BODY * LEADING + 2.0 * CALLOUT_PAD
}

/// The height of a heading's lines with the space around them, pt (as [`Layout::heading`]
/// lays it out away from a page's top).
fn heading_height(level: u8, text: &str) -> f32 {
    let size = match level {
        0 | 1 => 17.0,
        2 => 13.0,
        _ => 11.0,
    };
    let lines = wrap(text, Face::Bold, size, CONTENT_W).len() as f32;
    size * 0.7 + lines * size * 1.25 + if level <= 1 { 4.0 } else { 0.0 } + size * 0.3
}

/// How much of `rest` must stand on the same page as a heading above it: a chart whole, a
/// table's header and first [`KEEP_ROWS`] rows, the first row of a key–value block, a box
/// whole, three lines of text, and a heading with what it keeps in turn. Never more than a
/// page: what cannot be kept together anyway starts where it is.
fn start_height(rest: &[Block]) -> f32 {
    let lh = BODY * LEADING;
    let h = match rest.first() {
        None | Some(Block::PageBreak) => 0.0,
        Some(Block::Heading { level, text }) => {
            heading_height(*level, text) + start_height(&rest[1..])
        }
        Some(Block::Chart(c)) => {
            let (w, h) = c.pdf_canvas();
            CONTENT_W * h as f32 / w as f32 + 2.0
        }
        Some(Block::Table {
            header,
            rows,
            widths,
        }) => table_start_height(header, rows, widths),
        Some(Block::KeyValues(kvs)) => {
            let key_w = key_width(kvs);
            kvs.first().map_or(0.0, |(k, v)| {
                let n = wrap(k, Face::Regular, BODY, key_w - 10.0)
                    .len()
                    .max(wrap(v, Face::Regular, BODY, CONTENT_W - key_w).len());
                n as f32 * lh
            })
        }
        Some(Block::Callout { title, text, .. }) => callout_height(title, text),
        Some(Block::Small(t)) => {
            wrap(t, Face::Regular, SMALL, CONTENT_W).len().min(3) as f32 * SMALL * LEADING
        }
        Some(Block::Paragraph(t)) => {
            wrap(t, Face::Regular, BODY, CONTENT_W).len().min(3) as f32 * lh
        }
        Some(Block::Bullets(items) | Block::Numbered(items)) => items.first().map_or(0.0, |i| {
            wrap(i, Face::Regular, BODY, CONTENT_W - 18.0).len().min(4) as f32 * lh
        }),
    };
    h.min(CONTENT_TOP - CONTENT_BOTTOM)
}

/// The width of a two-column block's key column, pt: its widest key and a gap, at most 38 % of
/// the text width.
fn key_width(kvs: &[(String, String)]) -> f32 {
    let regular = font::face(Face::Regular);
    let widest = kvs
        .iter()
        .map(|(k, _)| regular.width(k, BODY))
        .fold(0.0f32, f32::max);
    (widest + 12.0).min(CONTENT_W * 0.38)
}

/// How many columns a table has: its widest row, or its header.
fn column_count(header: &[String], rows: &[Vec<String>]) -> usize {
    rows.iter()
        .map(Vec::len)
        .chain([header.len()])
        .max()
        .unwrap_or(0)
}

/// The height of a table's header and first [`KEEP_ROWS`] rows, as [`Layout::table`] lays
/// them out, pt.
fn table_start_height(header: &[String], rows: &[Vec<String>], widths: &[f32]) -> f32 {
    let ncols = column_count(header, rows);
    if ncols == 0 {
        return 0.0;
    }
    let col_w = column_widths(header, rows, widths, ncols);
    let row_h = |cells: &[String], face: Face| -> f32 {
        let n = (0..ncols)
            .map(|i| {
                wrap_cell(
                    cells.get(i).map(String::as_str).unwrap_or(""),
                    face,
                    col_w[i],
                )
                .len()
            })
            .max()
            .unwrap_or(1);
        n as f32 * TABLE * 1.3 + 6.0
    };
    let head = if header.is_empty() {
        0.0
    } else {
        row_h(header, Face::Bold)
    };
    head + rows
        .iter()
        .take(KEEP_ROWS)
        .map(|r| row_h(r, Face::Regular))
        .sum::<f32>()
}

/// Lines of a key–value block up to which it is kept on one page (program choice: a record
/// of a dozen lines; longer blocks break between their rows).
const KEEP_TOGETHER_LINES: usize = 16;

/// Horizontal padding on each side of a table cell, pt.
const CELL_PAD_X: f32 = 4.0;

/// The widths the table's columns take on the page, pt: `widths` (relative) when given for
/// every column, else from the cells' text ([`auto_widths`]), scaled to the content width.
fn column_widths(
    header: &[String],
    rows: &[Vec<String>],
    widths: &[f32],
    ncols: usize,
) -> Vec<f32> {
    let rel: Vec<f32> = if widths.len() == ncols && widths.iter().all(|w| w.is_finite() && *w > 0.0)
    {
        widths.to_vec()
    } else {
        auto_widths(header, rows, ncols)
    };
    let total: f32 = rel.iter().sum();
    rel.iter().map(|w| w / total * CONTENT_W).collect()
}

/// The lines of a table cell of width `col_w`. A column given exactly its longest word (a
/// one-word header over short cells, `Started` over `4`) comes back from the scaling in
/// [`column_widths`] a rounding error narrower than the word, so the wrap allows 0.01 pt: the
/// group report's month-over-month table printed "Starte" and "d" on two lines.
fn wrap_cell(text: &str, face: Face, col_w: f32) -> Vec<String> {
    wrap(
        text,
        face,
        TABLE,
        (col_w - 2.0 * CELL_PAD_X).max(TABLE) + 0.01,
    )
}

/// Column widths from the cells' text: each column gets at least its longest word (so words
/// are not broken) and the rest of the width goes by how much wider its longest cell is.
fn auto_widths(header: &[String], rows: &[Vec<String>], ncols: usize) -> Vec<f32> {
    let pad = 8.0;
    let mut min = vec![TABLE; ncols];
    let mut natural = vec![TABLE; ncols];
    let cells =
        std::iter::once((header, Face::Bold)).chain(rows.iter().map(|r| (&r[..], Face::Regular)));
    for (row, face) in cells {
        let m = font::face(face);
        for (i, cell) in row.iter().enumerate().take(ncols) {
            let longest_word = cell
                .split_whitespace()
                .map(|w| m.width(w, TABLE))
                .fold(0.0f32, f32::max);
            min[i] = min[i].max(longest_word + pad);
            natural[i] = natural[i].max(m.width(cell, TABLE) + pad);
        }
    }
    let min_sum: f32 = min.iter().sum();
    let natural_sum: f32 = natural.iter().sum();
    if natural_sum <= CONTENT_W {
        // Everything fits on one line: share out the spare room in proportion.
        return natural;
    }
    if min_sum >= CONTENT_W {
        return fair_minimums(&min);
    }
    let spare = CONTENT_W - min_sum;
    let want: f32 = natural_sum - min_sum;
    min.iter()
        .zip(&natural)
        .map(|(lo, hi)| lo + spare * (hi - lo) / want)
        .collect()
}

/// Column minimums (each its longest word) that do not fit the page, made to fit by narrowing
/// only the widest: every column that fits its share keeps its words whole, and the widest
/// share the rest equally (their long words break between characters, as `wrap` does). A
/// 100-letter name without a space in a seven-column table took nine-tenths of the width, and
/// the other columns broke every word after two letters.
fn fair_minimums(min: &[f32]) -> Vec<f32> {
    let mut sorted = min.to_vec();
    sorted.sort_by(f32::total_cmp);
    // The largest cap with: the columns under it, plus every other column at it, fill the page.
    let mut below = 0.0;
    let mut cap = CONTENT_W / min.len().max(1) as f32;
    for (i, w) in sorted.iter().enumerate() {
        let share = (CONTENT_W - below) / (sorted.len() - i) as f32;
        if *w > share {
            cap = share;
            break;
        }
        below += w;
        cap = *w;
    }
    min.iter().map(|w| w.min(cap)).collect()
}

/// Running header and footer for page `n` of `m`.
fn running_ops(doc: &Document, n: usize, m: usize) -> Vec<Op> {
    let mut ops = Vec::with_capacity(26);
    // Pagination artifacts (ISO 32000-1, 14.8.2.2.2): not part of the reading order.
    tagged::begin_artifact(&mut ops);
    let right = MARGIN_X + CONTENT_W;
    let header_base = PAGE_H - 12.5 * MM;
    if !doc.header.is_empty() {
        let h = truncate(&doc.header, Face::Regular, RUNNING, CONTENT_W);
        push_text(
            &mut ops,
            Face::Regular,
            RUNNING,
            muted(),
            MARGIN_X,
            header_base,
            &h,
        );
    }
    push_hrule(&mut ops, rule(), 0.5, MARGIN_X, right, PAGE_H - 14.5 * MM);
    push_hrule(&mut ops, rule(), 0.5, MARGIN_X, right, 15.0 * MM);
    let page = format!("page {n} of {m}");
    let page_w = font::text_width(Face::Regular, &page, RUNNING);
    let footer_base = 10.5 * MM;
    push_text(
        &mut ops,
        Face::Regular,
        RUNNING,
        muted(),
        right - page_w,
        footer_base,
        &page,
    );
    if !doc.footer.is_empty() {
        let f = truncate(
            &doc.footer,
            Face::Regular,
            RUNNING,
            CONTENT_W - page_w - 12.0,
        );
        push_text(
            &mut ops,
            Face::Regular,
            RUNNING,
            muted(),
            MARGIN_X,
            footer_base,
            &f,
        );
    }
    tagged::end_artifact(&mut ops);
    ops
}

/// Characters shown per face, and the translucency states used, across all pages.
fn scan_pages(pages: &[Vec<Op>]) -> (BTreeMap<Face, BTreeSet<char>>, BTreeSet<String>) {
    let mut chars: BTreeMap<Face, BTreeSet<char>> = BTreeMap::new();
    let mut states = BTreeSet::new();
    for ops in pages {
        let mut current = Face::Regular;
        for op in ops {
            match op {
                Op::SetFont {
                    font: PdfFontHandle::External(id),
                    ..
                } => {
                    current = if id.0 == Face::Bold.resource_name() {
                        Face::Bold
                    } else {
                        Face::Regular
                    };
                }
                Op::ShowText { items } => {
                    let set = chars.entry(current).or_default();
                    for item in items {
                        if let TextItem::Text(t) = item {
                            set.extend(t.chars());
                        }
                    }
                }
                Op::LoadGraphicsState { gs } => {
                    states.insert(gs.0.clone());
                }
                _ => {}
            }
        }
    }
    (chars, states)
}

/// A PDF text string: literal for plain ASCII, UTF-16BE with a byte-order mark otherwise
/// (ISO 32000-1, 7.9.2.2).
fn text_string(s: &str) -> Object {
    let s = &*super::neutralise(s);
    if s.bytes().all(|b| (0x20..0x7F).contains(&b)) {
        Object::String(s.as_bytes().to_vec(), StringFormat::Literal)
    } else {
        let mut bytes = vec![0xFE, 0xFF];
        for u in s.encode_utf16() {
            bytes.extend_from_slice(&u.to_be_bytes());
        }
        Object::String(bytes, StringFormat::Hexadecimal)
    }
}

/// Six capital letters naming a font subset (ISO 32000-1, 9.6.4), derived from its contents
/// so it is stable.
fn subset_tag(face: Face, chars: &BTreeSet<char>) -> String {
    let mut h = blake3::Hasher::new();
    h.update(face.resource_name().as_bytes());
    for c in chars {
        h.update(&(*c as u32).to_le_bytes());
    }
    h.finalize().as_bytes()[..6]
        .iter()
        .map(|b| char::from(b'A' + b % 26))
        .collect()
}

/// Replaces `from` with `to` wherever it is the value of /BaseFont or /FontName.
fn rename_font(obj: &mut Object, from: &[u8], to: &[u8]) {
    match obj {
        Object::Dictionary(d) => {
            for (k, v) in d.iter_mut() {
                if (k == b"BaseFont" || k == b"FontName")
                    && matches!(v, Object::Name(n) if n == from)
                {
                    *v = Object::Name(to.to_vec());
                } else {
                    rename_font(v, from, to);
                }
            }
        }
        Object::Array(a) => a.iter_mut().for_each(|v| rename_font(v, from, to)),
        _ => {}
    }
}

/// zlib level for content and font streams. Compression is the largest single cost of a report.
/// Measured on the 3-page test sample (release build, busy 2-core machine, best of 100 renders):
/// level 1 ≈ 2.1 ms and 39.0 KB, level 6 ≈ 3.1 ms and 34.6 KB, level 9 ≈ 4.2 ms and 34.6 KB.
/// On a real participant report (`cohortpress-bench --zlib-levels`, 8 streams, 131.6 KB before
/// compression) the streams take 2.47 ms and 41.9 KB at level 6, 1.36 ms and 43.3 KB at
/// level 3, 0.99 ms and 45.0 KB at level 2. Level 3 keeps the file within 4 % of the smallest
/// for about half the compression time: compression was 30 % of an end-to-end run's CPU time
/// at level 6, where ten thousand reports make the milliseconds count.
const ZLIB_LEVEL: u32 = 3;

/// `content` compressed at [`ZLIB_LEVEL`].
fn deflate(content: &[u8]) -> Result<Vec<u8>, PdfError> {
    let mut enc = flate2::write::ZlibEncoder::new(
        Vec::with_capacity(content.len() / 3),
        flate2::Compression::new(ZLIB_LEVEL),
    );
    enc.write_all(content)
        .map_err(|e| PdfError::Write(e.to_string()))?;
    enc.finish().map_err(|e| PdfError::Write(e.to_string()))
}

/// Font programs compressed so far in this process: (the program, its compressed bytes) by the
/// program's blake3 hash. Reports of one run embed the same few subsets over and over
/// ([`font::FaceMetrics::subset`]); compression is deterministic, so a repeated program is
/// given the bytes compressed the first time (compared in full, not trusted by hash). Bounded:
/// emptied when it holds [`PACKED_FONTS_MAX`] programs.
type PackedFonts = std::collections::HashMap<[u8; 32], (Vec<u8>, Vec<u8>)>;
static PACKED_FONTS: std::sync::OnceLock<std::sync::Mutex<PackedFonts>> =
    std::sync::OnceLock::new();
const PACKED_FONTS_MAX: usize = 64;

/// [`deflate`] of a font program, through [`PACKED_FONTS`].
fn deflate_font(content: &[u8]) -> Result<Vec<u8>, PdfError> {
    let key = *blake3::hash(content).as_bytes();
    let cache = PACKED_FONTS.get_or_init(Default::default);
    let lock = || {
        cache
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
    };
    if let Some((program, packed)) = lock().get(&key)
        && program.as_slice() == content
    {
        return Ok(packed.clone());
    }
    let packed = deflate(content)?;
    let mut map = lock();
    if map.len() >= PACKED_FONTS_MAX {
        map.clear();
    }
    map.insert(key, (content.to_vec(), packed.clone()));
    Ok(packed)
}

fn compress_streams(doc: &mut lopdf::Document) -> Result<(), PdfError> {
    for obj in doc.objects.values_mut() {
        if let Object::Stream(stream) = obj {
            if stream.dict.has(b"Filter") || !stream.allows_compression || stream.content.len() < 64
            {
                continue;
            }
            // An embedded TrueType program carries its length as /Length1 (ISO 32000-1, 9.9).
            let packed = if stream.dict.has(b"Length1") {
                deflate_font(&stream.content)?
            } else {
                deflate(&stream.content)?
            };
            if packed.len() < stream.content.len() {
                stream
                    .dict
                    .set("Filter", Object::Name(b"FlateDecode".to_vec()));
                stream.set_content(packed);
            }
        }
    }
    Ok(())
}

/// Lays out `doc` on A4 pages and returns the PDF bytes.
pub fn render_pdf(doc: &Document) -> Result<Vec<u8>, PdfError> {
    let mut layout = Layout::new();
    for (i, b) in doc.blocks.iter().enumerate() {
        layout.block(b, &doc.blocks[i + 1..]);
    }
    let tags = layout.tags;
    let mut pages = layout.pages;
    let m = pages.len();
    for (i, ops) in pages.iter_mut().enumerate() {
        ops.extend(running_ops(doc, i + 1, m));
    }
    let (chars, alpha_states) = scan_pages(&pages);

    let mut pdf = PdfDocument::new(&doc.title);
    for (face, set) in &chars {
        let sub = font::face(*face).subset(set).map_err(PdfError::Font)?;
        pdf.resources
            .fonts
            .map
            .insert(FontId(face.resource_name().to_string()), PdfFont::new(sub));
    }
    pdf.pages = pages
        .into_iter()
        .map(|ops| PdfPage::new(Mm(210.0), Mm(297.0), ops))
        .collect();
    let opts = PdfSaveOptions {
        optimize: false,
        subset_fonts: false,
        secure: true,
        image_optimization: None,
    };
    let mut warnings = Vec::new();
    let mut lo = printpdf::to_lopdf_doc(&pdf, &opts, &mut warnings);
    drop(pdf);
    // Tagged PDF for PDF/UA-1 (ISO 14289-1) is based on PDF 1.7 (ISO 32000-1).
    lo.version = "1.7".to_string();

    // Metadata: ours, with the caller's date instead of printpdf's defaults (which also claim
    // PDF/X conformance).
    let date = Object::String(
        doc.created
            .format("D:%Y%m%d%H%M%S")
            .to_string()
            .into_bytes(),
        StringFormat::Literal,
    );
    let info = lopdf::Dictionary::from_iter([
        ("Title", text_string(&doc.title)),
        ("Author", text_string(&doc.author)),
        ("Subject", text_string(&doc.subject)),
        ("Creator", text_string("cohortpress")),
        (
            "Producer",
            text_string(concat!(
                "cohortpress ",
                env!("CARGO_PKG_VERSION"),
                " (printpdf 0.12)"
            )),
        ),
        ("CreationDate", date.clone()),
        ("ModDate", date),
    ]);
    let info_id = lo.add_object(info);
    lo.trailer.set("Info", Object::Reference(info_id));
    // Document id from the seed (ISO 32000-1, 14.4: two byte strings; equal for a new file).
    let id = blake3::hash(doc.id_seed.as_bytes()).as_bytes()[..16].to_vec();
    lo.trailer.set(
        "ID",
        Object::Array(vec![
            Object::String(id.clone(), StringFormat::Hexadecimal),
            Object::String(id, StringFormat::Hexadecimal),
        ]),
    );
    // Drop the old info dictionary printpdf wrote (now unreferenced).
    lo.prune_objects();
    let producer = concat!(
        "cohortpress ",
        env!("CARGO_PKG_VERSION"),
        " (printpdf 0.12)"
    );
    tagged::write_structure(
        &mut lo,
        &tags,
        &tagged::Meta {
            title: &doc.title,
            author: &doc.author,
            subject: &doc.subject,
            lang: if doc.lang.is_empty() { "en" } else { &doc.lang },
            created: &doc.created.format("%Y-%m-%dT%H:%M:%S").to_string(),
            producer,
        },
        text_string,
    )
    .map_err(PdfError::Write)?;

    // Translucency states used by charts, in the shared ExtGState dictionary every page uses.
    if !alpha_states.is_empty() {
        let gs_ref = lo.page_iter().next().and_then(|page_id| {
            let page = lo.get_dictionary(page_id).ok()?;
            let res = match page.get(b"Resources").ok()? {
                Object::Reference(r) => lo.get_dictionary(*r).ok()?,
                Object::Dictionary(d) => d,
                _ => return None,
            };
            res.get(b"ExtGState").ok()?.as_reference().ok()
        });
        if let Some(Ok(gs)) = gs_ref.map(|r| lo.get_dictionary_mut(r)) {
            for name in &alpha_states {
                let pct: f32 = name.trim_start_matches("GA").parse().unwrap_or(100.0);
                let a = Object::Real(pct / 100.0);
                gs.set(
                    name.as_bytes().to_vec(),
                    lopdf::Dictionary::from_iter([
                        ("Type", Object::Name(b"ExtGState".to_vec())),
                        ("ca", a.clone()),
                        ("CA", a),
                    ]),
                );
            }
        }
    }

    // Subset fonts carry a tag before their name (ISO 32000-1, 9.6.4).
    for (face, set) in &chars {
        let name = face.postscript_name();
        let tagged = format!("{}+{}", subset_tag(*face, set), name);
        for obj in lo.objects.values_mut() {
            rename_font(obj, name.as_bytes(), tagged.as_bytes());
        }
    }
    compress_streams(&mut lo)?;
    let mut out = Vec::with_capacity(64 * 1024);
    lo.save_to(&mut out)
        .map_err(|e| PdfError::Write(e.to_string()))?;
    Ok(out)
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::render::chart::{
        BandSeries, Bar, BarChart, HLine, LineChart, LineSeries, LineStyle, Span, SpanKind,
    };
    use chrono::{Duration, NaiveDate};

    const NAME: &str = "Łucja Nguyễn-Øberg";

    #[test]
    fn a_font_program_compressed_again_comes_from_the_cache_with_the_same_bytes() {
        let chars: BTreeSet<char> = "Weight trend 0123456789".chars().collect();
        let program = font::face(Face::Regular)
            .subset(&chars)
            .unwrap()
            .original_bytes;
        let fresh = deflate(&program).unwrap();
        assert!(fresh.len() < program.len());
        assert_eq!(deflate_font(&program).unwrap(), fresh);
        assert_eq!(deflate_font(&program).unwrap(), fresh);
        // Another program is not given the first one's bytes.
        let mut other = program.clone();
        other[0] ^= 1;
        assert_eq!(deflate_font(&other).unwrap(), deflate(&other).unwrap());
        assert_ne!(deflate_font(&other).unwrap(), fresh);
    }

    fn day(i: i64) -> NaiveDate {
        NaiveDate::from_ymd_opt(2025, 3, 1).unwrap() + Duration::days(i)
    }

    fn weight_chart() -> Chart {
        let weigh_ins: Vec<(NaiveDate, f64)> = (0..84)
            .step_by(2)
            .map(|i| {
                (
                    day(i),
                    94.0 - i as f64 * 0.07 + ((i * 13) % 7) as f64 * 0.12,
                )
            })
            .collect();
        let trend: Vec<(NaiveDate, f64)> =
            (0..84).map(|i| (day(i), 94.3 - i as f64 * 0.07)).collect();
        Chart::Line(LineChart {
            title: format!("Weight — {NAME}"),
            y_label: "kg".into(),
            lines: vec![
                LineSeries {
                    label: "weigh-ins".into(),
                    points: weigh_ins,
                    style: LineStyle::Dots,
                },
                LineSeries {
                    label: "trend".into(),
                    points: trend,
                    style: LineStyle::Solid,
                },
                LineSeries {
                    label: "forecast".into(),
                    points: vec![(day(83), 88.5), (day(113), 86.6)],
                    style: LineStyle::Dashed,
                },
            ],
            bands: vec![BandSeries {
                label: "95 % interval".into(),
                points: (0..84)
                    .map(|i| (day(i), 93.6 - i as f64 * 0.07, 95.0 - i as f64 * 0.07))
                    .collect(),
            }],
            spans: vec![
                Span {
                    label: "plateau".into(),
                    from: day(30),
                    to: day(44),
                    kind: SpanKind::Plateau,
                },
                Span {
                    label: "regain".into(),
                    from: day(60),
                    to: day(66),
                    kind: SpanKind::Regain,
                },
                Span {
                    label: "forecast".into(),
                    from: day(83),
                    to: day(113),
                    kind: SpanKind::Forecast,
                },
            ],
            hlines: vec![HLine {
                label: "goal 85 kg".into(),
                y: 85.0,
            }],
            vlines: vec![],
            alt_text: "Weight fell from 94 to 88.5 kg over twelve weeks".into(),
            x_span: None,
        })
    }

    fn bars_chart() -> Chart {
        Chart::Bars(BarChart {
            title: "Sessions attended per month".into(),
            y_label: "sessions".into(),
            bars: vec![
                Bar {
                    label: "March".into(),
                    value: 4.0,
                    suppressed: false,
                },
                Bar {
                    label: "April".into(),
                    value: 3.0,
                    suppressed: false,
                },
                Bar {
                    label: "May".into(),
                    value: 0.0,
                    suppressed: true,
                },
                Bar {
                    label: "June".into(),
                    value: 4.0,
                    suppressed: false,
                },
            ],
            target: Some(4.0),
            alt_text: "Sessions attended: 4, 3, withheld, 4".into(),
        })
    }

    pub(crate) fn sample_document() -> Document {
        let rows: Vec<Vec<String>> = (0..60)
            .map(|i| {
                vec![
                    day(i * 2).format("%Y-%m-%d").to_string(),
                    format!("{:.1}", 94.0 - i as f64 * 0.14),
                    if i % 9 == 4 {
                        "scale replaced; first reading after the change".into()
                    } else {
                        String::new()
                    },
                ]
            })
            .collect();
        Document {
            title: format!("Monthly report — {NAME}"),
            subject: "Participant progress report".into(),
            author: "Harbourside Wellbeing Programme".into(),
            header: format!("Harbourside Wellbeing Programme · {NAME} · May 2025"),
            footer: "Confidential — for the participant and their care team".into(),
            lang: "en".into(),
            blocks: vec![
                Block::Heading { level: 1, text: format!("Progress report for {NAME}") },
                Block::KeyValues(vec![
                    ("Participant".into(), NAME.into()),
                    ("Period".into(), "1 March – 23 May 2025".into()),
                    ("Start weight".into(), "94.0 kg".into()),
                    ("Current trend".into(), "88.5 kg (−5.5 kg, −5.9 %)".into()),
                ]),
                Block::Paragraph(
                    "Your weight trend has fallen steadily over twelve weeks. The shaded band shows the \
                     range the trend is likely to lie in; single weigh-ins scatter around it because of \
                     water and meal timing, which is why we look at the trend rather than any one day."
                        .into(),
                ),
                Block::Chart(weight_chart()),
                Block::Callout {
                    tone: Tone::Caution,
                    title: "For review by your clinician".into(),
                    text: "Two days in April had a recorded intake below 1,000 kcal. This is flagged for review; \
                           it is not medical advice."
                        .into(),
                },
                Block::Heading { level: 2, text: "Sessions".into() },
                Block::Chart(bars_chart()),
                Block::Bullets(vec![
                    "Attended 11 of 12 group sessions.".into(),
                    "Logged food intake on 71 of 84 days, a long line that has to wrap onto a second line \
                     to check the hanging indent of bullet lists."
                        .into(),
                ]),
                Block::Heading { level: 2, text: "Weigh-ins".into() },
                Block::Table {
                    header: vec!["Date".into(), "Weight (kg)".into(), "Note".into()],
                    rows,
                    widths: vec![1.2, 1.0, 3.0],
                },
                Block::Callout {
                    tone: Tone::Info,
                    title: "How to read this report".into(),
                    text: "Trend values are smoothed estimates. Ask your programme lead if anything looks wrong.".into(),
                },
                Block::Small(
                    "Generated by cohortpress. Figures are estimates from self-recorded data and are not \
                     medical advice."
                        .into(),
                ),
            ],
            created: NaiveDate::from_ymd_opt(2025, 6, 1).unwrap().and_hms_opt(9, 30, 0).unwrap(),
            id_seed: "P-0042/2025-05".into(),
        }
    }

    /// Text of each page, decoded through each font's ToUnicode map.
    fn page_texts(bytes: &[u8]) -> Vec<String> {
        let doc = lopdf::Document::load_mem(bytes).expect("PDF parses");
        let pages = doc.get_pages();
        pages
            .keys()
            .map(|&n| {
                doc.extract_text(&[n])
                    .unwrap_or_else(|e| panic!("page {n}: {e}"))
            })
            .collect()
    }

    #[test]
    fn multi_page_document_has_header_footer_and_page_numbers() {
        let bytes = render_pdf(&sample_document()).unwrap();
        assert!(bytes.starts_with(b"%PDF-1.7"));
        let texts = page_texts(&bytes);
        let n = texts.len();
        assert!(n >= 3, "sample spans at least three pages, got {n}");
        for (i, t) in texts.iter().enumerate() {
            assert!(
                t.contains("Harbourside Wellbeing Programme"),
                "header on page {}: {t}",
                i + 1
            );
            assert!(t.contains("Confidential"), "footer on page {}", i + 1);
            assert!(
                t.contains(&format!("page {} of {n}", i + 1)),
                "page number on page {}: {t}",
                i + 1
            );
        }
        assert!(
            texts[0].contains(NAME),
            "Unicode name extracts: {}",
            texts[0]
        );
    }

    /// Roles of the structure tree in reading order (depth first), with each Figure's Alt and
    /// each TH's scope, and the MCIDs each element claims per page.
    fn structure(doc: &lopdf::Document) -> (Vec<String>, BTreeMap<u32, Vec<i64>>) {
        fn walk(
            doc: &lopdf::Document,
            pages: &BTreeMap<lopdf::ObjectId, u32>,
            obj: &Object,
            roles: &mut Vec<String>,
            mcids: &mut BTreeMap<u32, Vec<i64>>,
        ) {
            let dict = match obj {
                Object::Reference(r) => doc.get_dictionary(*r).unwrap(),
                Object::Dictionary(d) => d,
                _ => panic!("unexpected kid {obj:?}"),
            };
            if dict.get(b"Type").ok() == Some(&Object::Name(b"MCR".to_vec())) {
                let page = pages[&dict.get(b"Pg").unwrap().as_reference().unwrap()];
                let mcid = dict.get(b"MCID").unwrap().as_i64().unwrap();
                mcids.entry(page).or_default().push(mcid);
                return;
            }
            let role =
                String::from_utf8(dict.get(b"S").unwrap().as_name().unwrap().to_vec()).unwrap();
            let extra = match role.as_str() {
                "Figure" => format!(
                    "[{}]",
                    String::from_utf8_lossy(dict.get(b"Alt").unwrap().as_str().unwrap())
                ),
                "TH" => format!(
                    "[{}]",
                    String::from_utf8_lossy(
                        dict.get(b"A")
                            .unwrap()
                            .as_dict()
                            .unwrap()
                            .get(b"Scope")
                            .unwrap()
                            .as_name()
                            .unwrap()
                    )
                ),
                _ => String::new(),
            };
            roles.push(format!("{role}{extra}"));
            for k in dict.get(b"K").unwrap().as_array().unwrap() {
                walk(doc, pages, k, roles, mcids);
            }
        }
        let pages: BTreeMap<lopdf::ObjectId, u32> =
            doc.get_pages().into_iter().map(|(n, id)| (id, n)).collect();
        let catalog = doc.catalog().unwrap();
        let root = doc
            .get_dictionary(
                catalog
                    .get(b"StructTreeRoot")
                    .unwrap()
                    .as_reference()
                    .unwrap(),
            )
            .unwrap();
        let mut roles = Vec::new();
        let mut mcids = BTreeMap::new();
        walk(doc, &pages, root.get(b"K").unwrap(), &mut roles, &mut mcids);
        (roles, mcids)
    }

    #[test]
    fn the_pdf_is_tagged_with_headings_lists_tables_figures_and_artifacts() {
        let bytes = render_pdf(&sample_document()).unwrap();
        let doc = lopdf::Document::load_mem(&bytes).unwrap();
        let catalog = doc.catalog().unwrap();
        let mark = catalog.get(b"MarkInfo").unwrap().as_dict().unwrap();
        assert_eq!(mark.get(b"Marked").unwrap(), &Object::Boolean(true));
        assert_eq!(catalog.get(b"Lang").unwrap().as_str().unwrap(), b"en");
        let prefs = catalog
            .get(b"ViewerPreferences")
            .unwrap()
            .as_dict()
            .unwrap();
        assert_eq!(
            prefs.get(b"DisplayDocTitle").unwrap(),
            &Object::Boolean(true)
        );
        let xmp = doc
            .get_object(catalog.get(b"Metadata").unwrap().as_reference().unwrap())
            .unwrap()
            .as_stream()
            .unwrap();
        let xmp = String::from_utf8(xmp.content.clone()).unwrap();
        assert!(xmp.contains("<pdfuaid:part>1</pdfuaid:part>"), "{xmp}");
        assert!(xmp.contains("Monthly report — Łucja Nguyễn-Øberg"), "{xmp}");

        let (roles, mcids) = structure(&doc);
        let position = |role: &str| roles.iter().position(|r| r == role);
        // Reading order: the title, its key-value table, the paragraph, the figure…
        assert_eq!(roles[0], "Document");
        assert_eq!(roles[1], "H1");
        assert_eq!(roles[2], "Table");
        assert_eq!(roles[3], "TR");
        assert_eq!(roles[4], "TH[Row]");
        assert!(
            position("P") < position("Figure[Weight fell from 94 to 88.5 kg over twelve weeks]")
        );
        for role in ["H2", "L", "LI", "Lbl", "LBody", "TH[Column]", "TD", "Div"] {
            assert!(position(role).is_some(), "{role} missing from {roles:?}");
        }
        // A callout: its title is a level-3 heading, then its text.
        let div = position("Div").unwrap();
        assert_eq!(&roles[div + 1..div + 3], ["H3", "P"], "{roles:?}");
        // The 60-row weigh-in table: one header row and 60 body rows, although its header is
        // drawn again on every continuation page (as an artifact).
        let last_table = roles.iter().rposition(|r| r == "Table").unwrap();
        let rows = roles[last_table..]
            .iter()
            .take_while(|r| !r.starts_with("Div"))
            .filter(|r| *r == "TR")
            .count();
        assert_eq!(rows, 61);

        // Every marked-content sequence on every page is claimed exactly once, MCIDs 0..n, and
        // the parent tree has an entry for each.
        let tree_root = doc
            .get_dictionary(
                catalog
                    .get(b"StructTreeRoot")
                    .unwrap()
                    .as_reference()
                    .unwrap(),
            )
            .unwrap();
        let parent_tree = doc
            .get_dictionary(
                tree_root
                    .get(b"ParentTree")
                    .unwrap()
                    .as_reference()
                    .unwrap(),
            )
            .unwrap();
        let nums = parent_tree.get(b"Nums").unwrap().as_array().unwrap();
        for (n, page_id) in doc.get_pages() {
            let content = doc.get_and_decode_page_content(page_id).unwrap();
            let mut in_page: Vec<i64> = content
                .operations
                .iter()
                .filter(|op| op.operator == "BDC")
                .filter_map(|op| {
                    op.operands
                        .get(1)?
                        .as_dict()
                        .ok()?
                        .get(b"MCID")
                        .ok()?
                        .as_i64()
                        .ok()
                })
                .collect();
            let artifacts = content
                .operations
                .iter()
                .filter(|op| {
                    op.operator == "BMC" && op.operands[0] == Object::Name(b"Artifact".to_vec())
                })
                .count();
            assert!(
                artifacts >= 1,
                "page {n}: the running header and footer are artifacts"
            );
            let begins = content
                .operations
                .iter()
                .filter(|op| op.operator == "BDC" || op.operator == "BMC")
                .count();
            let ends = content
                .operations
                .iter()
                .filter(|op| op.operator == "EMC")
                .count();
            assert_eq!(begins, ends, "page {n}: balanced marked content");
            let mut claimed = mcids.get(&n).cloned().unwrap_or_default();
            claimed.sort();
            in_page.sort();
            assert_eq!(
                in_page,
                (0..in_page.len() as i64).collect::<Vec<_>>(),
                "page {n}"
            );
            assert_eq!(claimed, in_page, "page {n}");
            let page = doc.get_dictionary(page_id).unwrap();
            let key = page.get(b"StructParents").unwrap().as_i64().unwrap();
            assert_eq!(nums[2 * key as usize].as_i64().unwrap(), key);
            assert_eq!(
                nums[2 * key as usize + 1].as_array().unwrap().len(),
                in_page.len()
            );
        }
    }

    /// `pdfinfo` (poppler-utils), when installed, reads the same structure: "Tagged: yes" and
    /// the tree in reading order. Skipped with a message when it is not installed.
    #[test]
    fn poppler_sees_a_tagged_pdf_when_installed() {
        let bytes = render_pdf(&sample_document()).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("tagged.pdf");
        std::fs::write(&path, &bytes).unwrap();
        let Ok(info) = std::process::Command::new("pdfinfo").arg(&path).output() else {
            eprintln!("skipped: pdfinfo (poppler-utils) is not installed");
            return;
        };
        let info = String::from_utf8_lossy(&info.stdout);
        assert!(
            info.lines()
                .any(|l| l.starts_with("Tagged:") && l.ends_with("yes")),
            "{info}"
        );
        let tree = std::process::Command::new("pdfinfo")
            .arg("-struct")
            .arg(&path)
            .output()
            .unwrap();
        let tree = String::from_utf8_lossy(&tree.stdout);
        // Element names as poppler prints them, one per line, indented by depth.
        let names: Vec<&str> = tree
            .lines()
            .filter_map(|l| l.split_whitespace().next())
            .map(|w| w.trim_end_matches(':'))
            .collect();
        let first = |r: &str| {
            names
                .iter()
                .position(|n| *n == r)
                .unwrap_or_else(|| panic!("{r} not in {tree}"))
        };
        let order = [
            first("Document"),
            first("H1"),
            first("Figure"),
            first("H2"),
            first("L"),
        ];
        assert!(order.windows(2).all(|w| w[0] < w[1]), "{tree}");
        assert!(names.contains(&"LBody") && names.contains(&"TD"), "{tree}");
    }

    #[test]
    fn table_header_repeats_on_continuation_pages() {
        let bytes = render_pdf(&sample_document()).unwrap();
        let texts = page_texts(&bytes);
        let dates: Vec<String> = (0..60)
            .map(|r| day(r * 2).format("%Y-%m-%d").to_string())
            .collect();
        let with_rows: Vec<usize> = (0..texts.len())
            .filter(|&i| dates.iter().any(|d| texts[i].contains(d.as_str())))
            .collect();
        assert!(with_rows.len() >= 2, "table spans pages: {with_rows:?}");
        for i in with_rows {
            assert!(
                texts[i].contains("Weight (kg)"),
                "header repeated on page {}",
                i + 1
            );
        }
        // Every row is there exactly once.
        let all = texts.concat();
        for date in &dates {
            assert_eq!(all.matches(date.as_str()).count(), 1, "row {date}");
        }
    }

    #[test]
    fn same_document_gives_identical_bytes() {
        let doc = sample_document();
        let a = render_pdf(&doc).unwrap();
        let b = render_pdf(&doc).unwrap();
        assert_eq!(a, b);
        // The id follows the seed, and nothing else changes in the first page of content.
        let mut other = doc.clone();
        other.id_seed = "P-0043/2025-05".into();
        let c = render_pdf(&other).unwrap();
        assert_ne!(a, c);
        assert_eq!(a.len(), c.len());
    }

    #[test]
    fn renders_identically_across_threads() {
        let doc = sample_document();
        let reference = render_pdf(&doc).unwrap();
        let handles: Vec<_> = (0..4)
            .map(|_| {
                let doc = doc.clone();
                std::thread::spawn(move || render_pdf(&doc).unwrap())
            })
            .collect();
        for h in handles {
            assert_eq!(h.join().unwrap(), reference);
        }
    }

    #[test]
    fn fonts_are_subset_and_file_stays_small() {
        let bytes = render_pdf(&sample_document()).unwrap();
        // The regular face alone is 740 KB; subsets of both faces plus three pages with two
        // charts stay far below that.
        assert!(bytes.len() < 100_000, "{} bytes", bytes.len());
        let doc = lopdf::Document::load_mem(&bytes).unwrap();
        let mut names = Vec::new();
        for obj in doc.objects.values() {
            if let Ok(d) = obj.as_dict()
                && d.get(b"Type").and_then(|t| t.as_name()).ok() == Some(b"FontDescriptor")
            {
                let name = d.get(b"FontName").unwrap().as_name().unwrap();
                names.push(String::from_utf8_lossy(name).to_string());
            }
        }
        names.sort();
        assert_eq!(names.len(), 2, "{names:?}");
        assert!(
            names.iter().any(|n| n.ends_with("+DejaVuSans")),
            "{names:?}"
        );
        assert!(
            names.iter().any(|n| n.ends_with("+DejaVuSans-Bold")),
            "{names:?}"
        );
        assert!(names.iter().all(|n| n.find('+') == Some(6)), "{names:?}");
    }

    #[test]
    fn metadata_comes_from_the_document() {
        let bytes = render_pdf(&sample_document()).unwrap();
        let doc = lopdf::Document::load_mem(&bytes).unwrap();
        let info = doc.trailer.get(b"Info").unwrap().as_reference().unwrap();
        let info = doc.get_dictionary(info).unwrap();
        let decode = |k: &[u8]| lopdf::decode_text_string(info.get(k).unwrap()).unwrap();
        assert_eq!(decode(b"Title"), format!("Monthly report — {NAME}"));
        assert_eq!(decode(b"Author"), "Harbourside Wellbeing Programme");
        assert_eq!(decode(b"Subject"), "Participant progress report");
        assert_eq!(
            info.get(b"CreationDate").unwrap().as_str().unwrap(),
            b"D:20250601093000"
        );
        assert!(info.get(b"GTS_PDFXVersion").is_err());
        let id = doc.trailer.get(b"ID").unwrap().as_array().unwrap();
        assert_eq!(
            id[0].as_str().unwrap(),
            &blake3::hash(b"P-0042/2025-05").as_bytes()[..16]
        );
    }

    #[test]
    fn empty_document_is_one_page_with_running_text() {
        let doc = Document {
            title: String::new(),
            subject: String::new(),
            author: String::new(),
            header: "H".into(),
            footer: String::new(),
            lang: "en".into(),
            blocks: vec![Block::PageBreak],
            created: NaiveDate::from_ymd_opt(2025, 1, 1)
                .unwrap()
                .and_hms_opt(0, 0, 0)
                .unwrap(),
            id_seed: String::new(),
        };
        let texts = page_texts(&render_pdf(&doc).unwrap());
        assert_eq!(texts.len(), 1);
        assert!(texts[0].contains("page 1 of 1"));
    }

    #[test]
    fn page_breaks_and_empty_charts_are_handled() {
        let mut doc = sample_document();
        doc.blocks = vec![
            Block::Paragraph("one".into()),
            Block::PageBreak,
            Block::PageBreak,
            Block::Chart(Chart::Line(LineChart {
                title: "Nothing".into(),
                ..Default::default()
            })),
            Block::Table {
                header: vec!["A".into()],
                rows: vec![],
                widths: vec![],
            },
            Block::Table {
                header: vec![],
                rows: vec![vec!["x".into(), "y".into()]],
                widths: vec![0.0, f32::NAN],
            },
        ];
        let texts = page_texts(&render_pdf(&doc).unwrap());
        assert_eq!(texts.len(), 2);
        assert!(texts[1].contains("No data for this period"));
    }

    #[test]
    fn heading_moves_to_the_next_page_with_its_chart() {
        let mut doc = sample_document();
        let mut blocks: Vec<Block> = (0..44)
            .map(|i| Block::Paragraph(format!("Filler line {i}.")))
            .collect();
        blocks.push(Block::Heading {
            level: 2,
            text: "Weight over time".into(),
        });
        blocks.push(Block::Chart(weight_chart()));
        doc.blocks = blocks;
        let texts = page_texts(&render_pdf(&doc).unwrap());
        assert_eq!(texts.len(), 2);
        assert!(texts[0].contains("Filler line 27"));
        assert!(!texts[0].contains("Weight over time"));
        assert!(texts[1].contains("Weight over time") && texts[1].contains("weigh-ins"));
    }

    /// The text each page of `blocks` laid out shows, one string per page.
    fn laid_out(blocks: &[Block]) -> Vec<String> {
        let mut layout = Layout::new();
        for (i, b) in blocks.iter().enumerate() {
            layout.block(b, &blocks[i + 1..]);
        }
        layout
            .pages
            .iter()
            .map(|page| {
                let mut shown = String::new();
                for op in page {
                    if let Op::ShowText { items } = op {
                        for i in items {
                            if let TextItem::Text(t) = i {
                                shown.push_str(t);
                                shown.push('|');
                            }
                        }
                    }
                }
                shown
            })
            .collect()
    }

    /// A heading stays with the start of what follows it, whatever falls at the page's foot:
    /// the group report had a page ending with its "Methods" heading and one row, and a site's
    /// two headings with a table's header and one row. With any amount of text above, the page
    /// that holds the headings holds the table's first three rows too.
    #[test]
    fn a_heading_keeps_a_table_s_first_rows_with_it() {
        for n in 20..60 {
            let mut blocks: Vec<Block> = (0..n)
                .map(|i| Block::Paragraph(format!("Filler line {i}.")))
                .collect();
            blocks.push(Block::Heading {
                level: 2,
                text: "Site: Quay Lab".into(),
            });
            blocks.push(Block::Heading {
                level: 3,
                text: "Enrolment and retention".into(),
            });
            blocks.push(Block::Table {
                header: vec!["Measure".into(), "Participants".into()],
                rows: (1..=8)
                    .map(|r| vec![format!("Row {r}"), format!("{}", 40 + r)])
                    .collect(),
                widths: vec![],
            });
            let pages = laid_out(&blocks);
            let at = pages
                .iter()
                .position(|p| p.contains("Site: Quay Lab"))
                .unwrap();
            assert!(
                pages[at].contains("Enrolment and retention") && pages[at].contains("Row 3|"),
                "{n} lines above: page {} ends {:?}",
                at + 1,
                &pages[at][pages[at].len().saturating_sub(120)..]
            );
            // Nor is the table's last row left alone under a repeated header.
            let last = pages.iter().position(|p| p.contains("Row 8|")).unwrap();
            assert!(pages[last].contains("Row 7|"), "{n} lines above");
        }
    }

    /// A box that moves to the next page whole takes the last row of the block before it
    /// along: the group report's last page held only its "Please read" box.
    #[test]
    fn a_box_never_stands_alone_on_a_page_after_a_block() {
        let caution = "Counts from 1 to 10 are not shown exactly, and other cells are hidden too \
                       where a hidden count could otherwise be worked out by subtraction. "
            .repeat(6);
        for n in 10..50 {
            let mut blocks: Vec<Block> = (0..n)
                .map(|i| Block::Paragraph(format!("Filler line {i}.")))
                .collect();
            blocks.push(if n % 2 == 0 {
                Block::KeyValues(
                    (1..=4)
                        .map(|r| (format!("Method {r}"), format!("How it is done, part {r}.")))
                        .collect(),
                )
            } else {
                Block::Bullets(
                    (1..=4)
                        .map(|r| format!("How it is done, part {r}."))
                        .collect(),
                )
            });
            blocks.push(Block::Callout {
                tone: Tone::Caution,
                title: "Please read".into(),
                text: caution.clone(),
            });
            let pages = laid_out(&blocks);
            let at = pages
                .iter()
                .position(|p| p.contains("Please read"))
                .unwrap();
            assert!(
                pages[at].contains("How it is done, part 4."),
                "{n} lines above: page {} has the box without the block's last row",
                at + 1
            );
        }
    }

    /// A level-1 heading of 3,000 letters (a participant's name) filled page 1 and was drawn on
    /// over the running footer and off the page: its lines were never given a page break.
    #[test]
    fn a_heading_taller_than_a_page_goes_on_over_the_page_break() {
        let name = "W".repeat(3000);
        let mut layout = Layout::new();
        layout.block(
            &Block::Heading {
                level: 1,
                text: name.clone(),
            },
            &[],
        );
        layout.block(&Block::Paragraph("After the heading.".into()), &[]);
        assert!(layout.pages.len() >= 3, "{} pages", layout.pages.len());
        let mut shown = String::new();
        for (n, page) in layout.pages.iter().enumerate() {
            for op in page {
                if let Op::SetTextMatrix {
                    matrix: TextMatrix::Translate(_, Pt(baseline)),
                } = op
                {
                    // The lowest baseline of a 17 pt line that fits: its descent stays above
                    // the content's bottom, clear of the footer's rule at 15 mm.
                    assert!(
                        *baseline >= CONTENT_BOTTOM - 0.01,
                        "page {}: text at {baseline} below the content's bottom {CONTENT_BOTTOM}",
                        n + 1
                    );
                }
                if let Op::ShowText { items } = op {
                    for i in items {
                        if let TextItem::Text(t) = i {
                            shown.push_str(t);
                        }
                    }
                }
            }
        }
        // Nothing is lost over the breaks.
        assert_eq!(shown, format!("{name}After the heading."));
    }

    /// The clinician follow-up list with a 100-letter name: the name's column took nearly the
    /// whole width and every other column broke its words after two letters (nine pages for
    /// four people). The other columns keep their words whole.
    #[test]
    fn one_very_long_word_does_not_crush_the_other_columns() {
        let header: Vec<String> = [
            "Participant",
            "Name",
            "Status",
            "Reason",
            "Values",
            "Dates",
            "Details",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        let row: Vec<String> = [
            "SG-001".to_string(),
            format!("{}…", "W".repeat(100)),
            "continuing".into(),
            "Pregnancy noted in the profile".into(),
            "weight 64.4 kg; BMI 24.4".into(),
            "1 Sep 2026 to 30 Sep 2026".into(),
            "The profile notes a pregnancy.".into(),
        ]
        .to_vec();
        let rows = vec![row.clone()];
        let widths = auto_widths(&header, &rows, 7);
        // As the table lays them out: scaled to the page's width.
        let total: f32 = widths.iter().sum();
        let widths: Vec<f32> = widths.iter().map(|w| w / total * CONTENT_W).collect();
        for (i, w) in widths.iter().enumerate() {
            if i == 1 {
                continue;
            }
            for (cell, face) in [(&header[i], Face::Bold), (&row[i], Face::Regular)] {
                let longest = cell
                    .split_whitespace()
                    .map(|w| font::text_width(face, w, TABLE))
                    .fold(0.0f32, f32::max);
                assert!(
                    *w >= longest + 8.0 - 0.01,
                    "column {i} ({cell}): {w} < {longest}"
                );
            }
        }
        // Unchanged when the words fit: each column at least its longest word.
        assert_eq!(fair_minimums(&[50.0, 60.0]), vec![50.0, 60.0]);
        let capped = fair_minimums(&[50.0, 900.0, 60.0]);
        assert_eq!(capped[0], 50.0);
        assert_eq!(capped[2], 60.0);
        assert!(
            (capped.iter().sum::<f32>() - CONTENT_W).abs() < 0.01,
            "{capped:?}"
        );
    }

    #[test]
    fn a_one_word_header_over_short_cells_is_not_broken() {
        // The group report's month-over-month table, as its first release prints it: the
        // `Started` column is exactly its header word wide, and the PDF printed "Starte" / "d".
        let header: Vec<String> = [
            "Period",
            "Started",
            "Weighed in recently (retention)",
            "Mean change, baseline carried forward",
            "Reached 5 % loss",
        ]
        .iter()
        .map(|s| s.to_string())
        .collect();
        let rows = vec![
            ["June 2026", "4", "4 (100 %)", "−3.2 %", "0–4 (0–100 %)"]
                .iter()
                .map(|s| s.to_string())
                .collect::<Vec<_>>(),
        ];
        let col_w = column_widths(&header, &rows, &[], 5);
        for (i, cell) in header.iter().enumerate() {
            let lines = wrap_cell(cell, Face::Bold, col_w[i]);
            for line in &lines {
                for word in line.split_whitespace() {
                    assert!(
                        cell.split_whitespace().any(|w| w == word),
                        "column {i} `{cell}` broken inside a word: {lines:?}"
                    );
                }
            }
        }
    }

    #[test]
    fn wrapping_respects_width_and_breaks_long_words() {
        let width = 120.0;
        let text = "Participants recorded their weight weekly; a supercalifragilisticexpialidociously long token must still fit.";
        let lines = wrap(text, Face::Regular, BODY, width);
        assert!(lines.len() > 2);
        for l in &lines {
            assert!(
                font::text_width(Face::Regular, l, BODY) <= width + 0.01,
                "{l:?}"
            );
        }
        // No characters lost except the spaces at line breaks.
        assert_eq!(lines.concat().replace(' ', ""), text.replace(' ', ""));
        assert_eq!(wrap("a\nb", Face::Regular, BODY, width), vec!["a", "b"]);
        // A percent sign never starts a line ("the shaded band is its 95 / % range." on two
        // lines, in the sample's weight-chart caption).
        let text = "the smoothed trend with its band; the shaded band is its 95 % range of values.";
        for width in (60..400).map(|w| w as f32) {
            let lines = wrap(text, Face::Regular, BODY, width);
            assert!(
                lines.iter().all(|l| !l.starts_with('%')),
                "{width}: {lines:?}"
            );
            assert_eq!(
                lines.concat().replace(' ', ""),
                text.replace(' ', ""),
                "{width}"
            );
        }
        assert_eq!(wrap("", Face::Regular, BODY, width), vec![""]);
    }

    /// Writes the sample to /tmp/render-sample.pdf for a visual check:
    /// `cargo test --lib render::pdf::tests::write_sample -- --ignored`.
    #[test]
    #[ignore]
    fn write_sample() {
        let bytes = render_pdf(&sample_document()).unwrap();
        std::fs::write("/tmp/render-sample.pdf", &bytes).unwrap();
        let svg = crate::render::chart::to_svg(&weight_chart(), 720, 340);
        std::fs::write("/tmp/render-sample.svg", svg).unwrap();
    }
}

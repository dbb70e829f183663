//! The one chart description used by every report format, and the plotters code that draws it.
//!
//! The same `draw` function draws into plotters' SVG backend (inline charts in HTML reports,
//! [`to_svg`]) and into our PDF backend (`plotters_pdf`, true vector graphics). Both
//! backends measure text with the embedded DejaVu Sans metrics (`estimate_text_size`), so the
//! two outputs lay out identically; plotters' own fallback estimate counts bytes and makes
//! non-ASCII labels too wide.
//!
//! Colours come from the Okabe–Ito palette (Okabe & Ito 2008, "Color Universal Design"), which
//! stays distinguishable for the common forms of colour-vision deficiency; fills are light tints.

use chrono::{Datelike, Duration, NaiveDate};
use plotters::coord::Shift;
use plotters::prelude::*;
use plotters::series::LineSeries as PlotLine;
use plotters::style::text_anchor::{HPos, Pos, VPos};
use plotters_backend::{BackendColor, BackendCoord, BackendTextStyle, DrawingErrorKind, FontStyle};

use super::font::{self, Face};

/// A time-series chart: weight trend lines, weigh-in dots, uncertainty bands, shaded periods
/// (plateaus, regains, forecasts) and horizontal reference lines (goals, baselines).
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LineChart {
    pub title: String,
    pub y_label: String,
    pub lines: Vec<LineSeries>,
    pub bands: Vec<BandSeries>,
    pub spans: Vec<Span>,
    pub hlines: Vec<HLine>,
    /// Vertical rules at dates (the day someone left the program), each labelled at its top.
    pub vlines: Vec<VLine>,
    /// Text alternative for screen readers (SVG `<title>` and `aria-label`).
    pub alt_text: String,
    /// Days the axis covers at least, whatever the series hold (`None`: the series' days
    /// alone). The weight chart names the days it is for; without this, someone with no
    /// weigh-in for months got an axis that ended at their last one.
    pub x_span: Option<(NaiveDate, NaiveDate)>,
}

/// One line (or dot series) of dated values. A non-finite value is a gap: the line is not drawn
/// across it.
#[derive(Debug, Clone, PartialEq)]
pub struct LineSeries {
    pub label: String,
    pub points: Vec<(NaiveDate, f64)>,
    pub style: LineStyle,
}

/// How a [`LineSeries`] is drawn.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LineStyle {
    Solid,
    Dashed,
    /// Markers only, no connecting line (weigh-ins).
    Dots,
}

/// A shaded band between a lower and an upper value per date (an interval around a trend). A
/// non-finite bound is a gap: the band is not drawn across it.
#[derive(Debug, Clone, PartialEq)]
pub struct BandSeries {
    pub label: String,
    /// (date, lower, upper)
    pub points: Vec<(NaiveDate, f64, f64)>,
}

/// A shaded stretch of dates, `from` through `to` inclusive.
#[derive(Debug, Clone, PartialEq)]
pub struct Span {
    pub label: String,
    pub from: NaiveDate,
    pub to: NaiveDate,
    pub kind: SpanKind,
}

/// What a [`Span`] marks; each kind has its own tint.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SpanKind {
    Plateau,
    Regain,
    Forecast,
}

/// A horizontal reference line across the whole chart.
#[derive(Debug, Clone, PartialEq)]
pub struct HLine {
    pub label: String,
    pub y: f64,
}

/// A vertical rule across the plot at one date, with a short label at its top (`left the
/// program`) and its legend entry (`label`).
#[derive(Debug, Clone, PartialEq)]
pub struct VLine {
    /// The legend entry (`Left the program`).
    pub label: String,
    /// The words at the rule's top (`left the program`).
    pub tag: String,
    pub date: NaiveDate,
}

/// A bar chart of labelled values, with an optional target line.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct BarChart {
    pub title: String,
    pub y_label: String,
    pub bars: Vec<Bar>,
    pub target: Option<f64>,
    /// Text alternative for screen readers.
    pub alt_text: String,
}

/// One bar. A suppressed bar (too few people behind it to report) is drawn as an empty
/// outline with a mark and no value.
#[derive(Debug, Clone, PartialEq)]
pub struct Bar {
    pub label: String,
    pub value: f64,
    pub suppressed: bool,
}

/// Any chart a report can hold.
#[derive(Debug, Clone, PartialEq)]
pub enum Chart {
    Line(LineChart),
    Bars(BarChart),
}

impl Chart {
    /// The chart's title.
    pub fn title(&self) -> &str {
        match self {
            Chart::Line(c) => &c.title,
            Chart::Bars(c) => &c.title,
        }
    }

    /// The chart's text alternative.
    pub fn alt_text(&self) -> &str {
        match self {
            Chart::Line(c) => &c.alt_text,
            Chart::Bars(c) => &c.alt_text,
        }
    }

    /// Replaces the text alternative (a report's figure caption describes the chart in place).
    pub fn set_alt_text(&mut self, alt: &str) {
        match self {
            Chart::Line(c) => c.alt_text = alt.to_string(),
            Chart::Bars(c) => c.alt_text = alt.to_string(),
        }
    }

    /// The drawing size (in chart pixels) the PDF renderer uses; it scales this to the page.
    /// A line chart is its plot plus the strip below that holds its legend.
    pub(crate) fn pdf_canvas(&self) -> (u32, u32) {
        match self {
            Chart::Line(_) => (PDF_W, PDF_PLOT_H + legend_strip(self, PDF_W)),
            Chart::Bars(_) => (PDF_W, 300 + legend_strip(self, PDF_W)),
        }
    }
}

// ---- palette ------------------------------------------------------------------------------
// Okabe–Ito colours (Okabe & Ito 2008, "Color Universal Design", https://jfly.uni-koeln.de/color/).

const OI_ORANGE: RGBColor = RGBColor(0xE6, 0x9F, 0x00);
const OI_SKY: RGBColor = RGBColor(0x56, 0xB4, 0xE9);
const OI_GREEN: RGBColor = RGBColor(0x00, 0x9E, 0x73);
const OI_YELLOW: RGBColor = RGBColor(0xF0, 0xE4, 0x42);
const OI_BLUE: RGBColor = RGBColor(0x00, 0x72, 0xB2);
const OI_VERMILLION: RGBColor = RGBColor(0xD5, 0x5E, 0x00);
const OI_PURPLE: RGBColor = RGBColor(0xCC, 0x79, 0xA7);

/// Line colours in the order series are given.
const LINE_COLOURS: [RGBColor; 6] = [
    OI_BLUE,
    OI_VERMILLION,
    OI_GREEN,
    OI_PURPLE,
    OI_ORANGE,
    OI_SKY,
];
/// Fills of the interval bands in the order they are given, so two bands never share a colour,
/// and in hues apart from the shaded periods (plateau yellow, regain vermillion, forecast grey):
/// a forecast band once took orange and could not be told from a regain period beside it.
const BAND_COLOURS: [(RGBColor, f64); 3] = [(OI_SKY, 0.25), (OI_GREEN, 0.22), (OI_PURPLE, 0.22)];
const INK: RGBColor = RGBColor(0x22, 0x22, 0x22);
const MUTED: RGBColor = RGBColor(0x5F, 0x5F, 0x5F);
const GRID: RGBColor = RGBColor(0xE3, 0xE3, 0xE3);
const AXIS: RGBColor = RGBColor(0x9A, 0x9A, 0x9A);

/// Font family written into SVG text; the PDF embeds DejaVu Sans itself. Verdana is the closest
/// common fallback in width.
const FAMILY: &str = "DejaVu Sans, Verdana, sans-serif";
/// plotters' SVG backend writes `font-size = size / 1.24`; the PDF backend and the text
/// measurement use the same em size so both outputs agree.
pub(crate) const SVG_FONT_DIVISOR: f32 = 1.24;
/// Title and label sizes in plotters' size units.
const TITLE_SIZE: f64 = 19.0;
const LABEL_SIZE: f64 = 14.0;

fn span_fill(kind: SpanKind) -> RGBAColor {
    match kind {
        SpanKind::Plateau => OI_YELLOW.mix(0.35),
        SpanKind::Regain => OI_VERMILLION.mix(0.18),
        SpanKind::Forecast => RGBColor(0x80, 0x80, 0x80).mix(0.12),
    }
}

fn text(size: f64, colour: RGBColor) -> TextStyle<'static> {
    (FAMILY, size).into_font().color(&colour)
}

fn bold_text(size: f64, colour: RGBColor) -> TextStyle<'static> {
    (FAMILY, size, FontStyle::Bold).into_font().color(&colour)
}

/// The title's style for a drawing `width` pixels wide: `TITLE_SIZE`, or smaller (not below
/// `LABEL_SIZE`) so that the title, measured with the embedded font, fits between the chart's
/// 10-pixel margins. The narrow drawing (380 px) cut "Mean weight change by week (those still
/// weighing in)" off at both ends on a phone.
fn title_text(title: &str, width: u32) -> TextStyle<'static> {
    let room = f64::from(width.saturating_sub(2 * 10 + 4));
    let (w, _) = estimate_text_size(title, &bold_text(TITLE_SIZE, INK));
    let size = if f64::from(w) > room && w > 0 {
        (TITLE_SIZE * room / f64::from(w)).max(LABEL_SIZE)
    } else {
        TITLE_SIZE
    };
    bold_text(size, INK)
}

// ---- text measurement shared by both backends ----------------------------------------------

/// The face a plotters text style maps to.
pub(crate) fn style_face<S: BackendTextStyle>(style: &S) -> Face {
    match style.style() {
        FontStyle::Bold => Face::Bold,
        _ => Face::Regular,
    }
}

/// The em size (in chart pixels) that both backends render a plotters text style at.
pub(crate) fn em_size<S: BackendTextStyle>(style: &S) -> f32 {
    style.size() as f32 / SVG_FONT_DIVISOR
}

/// Text box size from the embedded font's advance widths; both backends use this.
pub(crate) fn estimate_text_size<S: BackendTextStyle>(text: &str, style: &S) -> (u32, u32) {
    let em = em_size(style);
    let w = font::text_width(style_face(style), text, em);
    // DejaVu Sans ascender + descender: (1901 + 483) / 2048 em (hhea), about 1.16 em.
    (w.ceil() as u32, (em * 1.16).ceil() as u32)
}

// ---- SVG -----------------------------------------------------------------------------------

/// plotters' SVG backend with text measured by the embedded font metrics.
struct MeasuredSvg<'a>(SVGBackend<'a>);

impl DrawingBackend for MeasuredSvg<'_> {
    type ErrorType = <SVGBackend<'static> as DrawingBackend>::ErrorType;

    fn get_size(&self) -> (u32, u32) {
        self.0.get_size()
    }
    fn ensure_prepared(&mut self) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.ensure_prepared()
    }
    fn present(&mut self) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.present()
    }
    fn draw_pixel(
        &mut self,
        point: BackendCoord,
        color: BackendColor,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_pixel(point, color)
    }
    fn draw_line<S: plotters_backend::BackendStyle>(
        &mut self,
        from: BackendCoord,
        to: BackendCoord,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_line(from, to, style)
    }
    fn draw_rect<S: plotters_backend::BackendStyle>(
        &mut self,
        upper_left: BackendCoord,
        bottom_right: BackendCoord,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_rect(upper_left, bottom_right, style, fill)
    }
    fn draw_path<S: plotters_backend::BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        path: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_path(path, style)
    }
    fn draw_circle<S: plotters_backend::BackendStyle>(
        &mut self,
        center: BackendCoord,
        radius: u32,
        style: &S,
        fill: bool,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_circle(center, radius, style, fill)
    }
    fn fill_polygon<S: plotters_backend::BackendStyle, I: IntoIterator<Item = BackendCoord>>(
        &mut self,
        vert: I,
        style: &S,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.fill_polygon(vert, style)
    }
    fn draw_text<S: BackendTextStyle>(
        &mut self,
        text: &str,
        style: &S,
        pos: BackendCoord,
    ) -> Result<(), DrawingErrorKind<Self::ErrorType>> {
        self.0.draw_text(text, style, pos)
    }
    fn estimate_text_size<S: BackendTextStyle>(
        &self,
        text: &str,
        style: &S,
    ) -> Result<(u32, u32), DrawingErrorKind<Self::ErrorType>> {
        Ok(estimate_text_size(text, style))
    }
}

/// Draws `chart` as a standalone `<svg>` element for inline HTML.
///
/// The output has no scripts and no external references, all text is escaped, and the same
/// chart always gives the same string. A `<title>` and `aria-label` carry the alt text.
///
/// The plot is `plot_height` tall; a line chart's legend goes in a strip below it, where it
/// cannot cover data, so the SVG is as tall as plot and legend together.
pub fn to_svg(chart: &Chart, width: u32, plot_height: u32) -> String {
    let strip = legend_strip(chart, width);
    svg_string(chart, width, plot_height + strip, strip)
}

/// Height of the legend strip below `chart` drawn `width` pixels wide: a line chart's entries,
/// or a bar chart's target line (0 when there is nothing to name).
fn legend_strip(chart: &Chart, width: u32) -> u32 {
    match chart {
        Chart::Line(c) => legend_strip_height(c, width),
        Chart::Bars(c) if c.target.is_some_and(f64::is_finite) => {
            LEGEND_LINE_PX + 2 * LEGEND_MARGIN + 8
        }
        Chart::Bars(_) => 0,
    }
}

/// Draws `chart` as an `<svg>` for narrow screens: the same as [`to_svg`], whose legend strip
/// takes two columns instead of three at a phone's width.
pub fn to_svg_narrow(chart: &Chart, width: u32, plot_height: u32) -> String {
    to_svg(chart, width, plot_height)
}

/// The PDF's chart drawing: width and plot height in chart pixels (scaled to the page).
const PDF_W: u32 = 720;
const PDF_PLOT_H: u32 = 300;

/// Columns of the legend strip for a drawing `width` pixels wide.
fn legend_columns(width: u32) -> usize {
    if width >= 600 { 3 } else { 2 }
}

/// Legend entries of a line chart: labelled lines, bands and reference lines, and each distinct
/// span label.
fn legend_entries(c: &LineChart) -> usize {
    let spans: std::collections::BTreeSet<&str> = c
        .spans
        .iter()
        .filter(|s| !s.label.is_empty())
        .map(|s| s.label.as_str())
        .collect();
    c.lines
        .iter()
        .filter(|l| !l.label.is_empty() && l.points.iter().any(|p| p.1.is_finite()))
        .count()
        + c.bands
            .iter()
            .filter(|b| !b.label.is_empty() && band_drawn(b))
            .count()
        + c.hlines
            .iter()
            .filter(|h| !h.label.is_empty() && h.y.is_finite())
            .count()
        + c.vlines.iter().filter(|v| !v.label.is_empty()).count()
        + spans.len()
}

/// Whether a band is drawn: two consecutive points (by date) with finite bounds, as the
/// drawing needs for a piece of it.
fn band_drawn(b: &BandSeries) -> bool {
    let mut all = b.points.clone();
    all.sort_by_key(|p| p.0);
    finite_runs(&all, |p| p.1.is_finite() && p.2.is_finite())
        .iter()
        .any(|run| run.len() >= 2)
}

/// Height of the strip under a chart `width` pixels wide that holds its legend.
fn legend_strip_height(c: &LineChart, width: u32) -> u32 {
    match legend_entries(c) {
        0 => 0,
        n => n.div_ceil(legend_columns(width)) as u32 * LEGEND_LINE_PX + 2 * LEGEND_MARGIN + 8,
    }
}

/// Line height of legend entries at `LABEL_SIZE - 1`, and the legend's margin.
const LEGEND_LINE_PX: u32 = 20;
const LEGEND_MARGIN: u32 = 6;
/// Left edge of the legend strip's first column, in pixels.
const LEGEND_X: i32 = 12;

fn svg_string(chart: &Chart, width: u32, height: u32, legend: u32) -> String {
    let (width, height) = (width.max(80), height.max(60));
    let mut body = String::with_capacity(16 * 1024);
    {
        let root =
            MeasuredSvg(SVGBackend::with_string(&mut body, (width, height))).into_drawing_area();
        if draw_with(chart, &root, legend).is_err() {
            // Drawing into a String cannot fail on I/O; a plotters layout error (e.g. an area too
            // small for the labels) leaves a blank chart rather than a broken report.
            let _ = root.fill(&WHITE);
        }
        let _ = root.present();
    }
    // Add accessibility metadata right after the opening tag.
    let alt = if chart.alt_text().is_empty() {
        chart.title()
    } else {
        chart.alt_text()
    };
    let mut out = String::with_capacity(body.len() + alt.len() * 2 + 64);
    match body.find('>') {
        Some(end) if body.starts_with("<svg") => {
            out.push_str(&body[..end]);
            out.push_str(" role=\"img\" aria-label=\"");
            escape_xml_into(&mut out, alt);
            out.push_str("\"><title>");
            escape_xml_into(&mut out, alt);
            out.push_str("</title>");
            out.push_str(&body[end + 1..]);
        }
        _ => out.push_str(&body),
    }
    out
}

fn escape_xml_into(out: &mut String, s: &str) {
    for c in super::neutralise(s).chars() {
        match c {
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '&' => out.push_str("&amp;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            // Control characters are not allowed in XML 1.0.
            c if (c as u32) < 0x20 && c != '\n' && c != '\t' => out.push(' '),
            c => out.push(c),
        }
    }
}

// ---- drawing -------------------------------------------------------------------------------

type DrawResult<DB> = Result<(), DrawingAreaErrorKind<<DB as DrawingBackend>::ErrorType>>;

/// Draws `chart` onto `root` (any plotters backend) at the size [`Chart::pdf_canvas`] gives.
pub(crate) fn draw<DB: DrawingBackend>(
    chart: &Chart,
    root: &DrawingArea<DB, Shift>,
) -> DrawResult<DB> {
    draw_with(chart, root, legend_strip(chart, root.dim_in_pixel().0))
}

/// Draws `chart`; a line chart's legend goes in the bottom `legend` pixels.
fn draw_with<DB: DrawingBackend>(
    chart: &Chart,
    root: &DrawingArea<DB, Shift>,
    legend: u32,
) -> DrawResult<DB> {
    root.fill(&WHITE)?;
    match chart {
        Chart::Line(c) => draw_line_chart(c, root, legend),
        Chart::Bars(c) => draw_bar_chart(c, root, legend),
    }
}

/// Title plus a centred note, for a chart with nothing to plot.
fn draw_empty<DB: DrawingBackend>(title: &str, root: &DrawingArea<DB, Shift>) -> DrawResult<DB> {
    let (w, h) = root.dim_in_pixel();
    root.draw(&Text::new(
        title.to_string(),
        (w as i32 / 2, 10),
        title_text(title, w).pos(Pos::new(HPos::Center, VPos::Top)),
    ))?;
    root.draw(&Text::new(
        "No data for this period".to_string(),
        (w as i32 / 2, h as i32 / 2),
        text(LABEL_SIZE, MUTED).pos(Pos::new(HPos::Center, VPos::Center)),
    ))?;
    Ok(())
}

/// A number for an axis or a value label: at most two decimals, no trailing zeros, and a comma
/// between thousands (`2,832`), as every other number in the reports is written (the energy
/// chart's axis read `2832` beside `2,832 kcal/day` in the table).
fn fmt_num(v: f64, max_decimals: usize) -> String {
    let s = format!("{v:.max_decimals$}");
    let s = if s.contains('.') {
        s.trim_end_matches('0').trim_end_matches('.').to_string()
    } else {
        s
    };
    if s == "-0" {
        return "0".to_string();
    }
    let (sign, rest) = match s.strip_prefix('-') {
        Some(r) => ("\u{2212}", r),
        None => ("", s.as_str()),
    };
    let (int, frac) = rest.split_at(rest.find('.').unwrap_or(rest.len()));
    let mut grouped = String::new();
    for (i, c) in int.chars().enumerate() {
        if i > 0 && (int.len() - i) % 3 == 0 {
            grouped.push(',');
        }
        grouped.push(c);
    }
    // A true minus sign, as everywhere else in the reports.
    format!("{sign}{grouped}{frac}")
}

/// Cuts `s` with an ellipsis so it fits `max_px` at the label size.
fn fit_label(s: &str, max_px: f32, size: f64) -> String {
    font::ellipsize(Face::Regular, s, size as f32 / SVG_FONT_DIVISOR, max_px)
}

/// Smallest span of a line chart's value axis, as a share of the largest value's size (program
/// choice): a steady person's weekly energy use varies by a few kcal around 2,800, and an axis
/// drawn over just that range ticked "2,831.5, 2,832.0, …", precision the estimate does not
/// have, and made a flat line look like swings.
const MIN_SPAN_OF_MAGNITUDE: f64 = 0.02;

/// Value range padded by 6 % on each side; a flat range is widened so the axis has a scale, and
/// a range narrower than [`MIN_SPAN_OF_MAGNITUDE`] of its values' size is widened to it, about
/// its middle.
fn padded(lo: f64, hi: f64) -> (f64, f64) {
    if !(lo.is_finite() && hi.is_finite()) {
        return (0.0, 1.0);
    }
    if (hi - lo).abs() < 1e-9 {
        let d = if lo.abs() > 1.0 { lo.abs() * 0.05 } else { 1.0 };
        return (lo - d, hi + d);
    }
    let min_span = MIN_SPAN_OF_MAGNITUDE * lo.abs().max(hi.abs());
    let (lo, hi) = if hi - lo < min_span {
        let mid = (lo + hi) / 2.0;
        (mid - min_span / 2.0, mid + min_span / 2.0)
    } else {
        (lo, hi)
    };
    let pad = (hi - lo) * 0.06;
    (lo - pad, hi + pad)
}

fn draw_line_chart<DB: DrawingBackend>(
    c: &LineChart,
    root: &DrawingArea<DB, Shift>,
    legend: u32,
) -> DrawResult<DB> {
    // Dates from plotted data decide the x range; spans are clipped to it (a forecast span
    // alone, with no data, still gives a range).
    let mut dates = c
        .lines
        .iter()
        .flat_map(|l| l.points.iter().filter(|p| p.1.is_finite()).map(|p| p.0))
        .chain(c.bands.iter().flat_map(|b| {
            b.points
                .iter()
                .filter(|p| p.1.is_finite() && p.2.is_finite())
                .map(|p| p.0)
        }))
        .peekable();
    let (mut x0, mut x1) = if dates.peek().is_some() {
        dates.fold((NaiveDate::MAX, NaiveDate::MIN), |(a, b), d| {
            (a.min(d), b.max(d))
        })
    } else if let (Some(a), Some(b)) = (
        c.spans.iter().map(|s| s.from.min(s.to)).min(),
        c.spans.iter().map(|s| s.to.max(s.from)).max(),
    ) {
        (a, b)
    } else {
        return draw_empty(&c.title, root);
    };
    for s in &c.spans {
        // Forecast spans extend the axis forward: they are the point of showing one.
        if s.kind == SpanKind::Forecast {
            x1 = x1.max(s.to);
        }
    }
    if let Some((from, to)) = c.x_span.filter(|(f, t)| f <= t) {
        x0 = x0.min(from);
        x1 = x1.max(to);
    }
    if x0 == x1 {
        x0 -= Duration::days(3);
        x1 += Duration::days(3);
    }

    let ys = c
        .lines
        .iter()
        .flat_map(|l| l.points.iter().map(|p| p.1))
        .chain(
            c.bands
                .iter()
                .flat_map(|b| b.points.iter().flat_map(|p| [p.1, p.2])),
        )
        .chain(c.hlines.iter().map(|h| h.y))
        .filter(|v| v.is_finite());
    let (lo, hi) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let (y0, y1) = padded(lo, hi);

    let long_range = (x1 - x0).num_days() > 400;
    let date_fmt = move |d: &NaiveDate| -> String {
        if long_range {
            d.format("%b %Y").to_string()
        } else {
            format!("{} {}", d.day(), d.format("%b"))
        }
    };
    let y_fmt = |v: &f64| fmt_num(*v, 2);

    // A legend below the plot gets its own strip at the bottom of the drawing.
    let (plot_area, strip) = if legend > 0 {
        let (_, h) = root.dim_in_pixel();
        let (top, bottom) = root.split_vertically(h.saturating_sub(legend));
        (top, Some(bottom))
    } else {
        (root.clone(), None)
    };
    let mut swatches: Vec<(String, Swatch)> = Vec::new();
    let mut chart = ChartBuilder::on(&plot_area)
        .caption(&c.title, title_text(&c.title, plot_area.dim_in_pixel().0))
        .margin(10)
        // Room for half the widest date label beyond the plot's right edge, where the axis may
        // end on a label: "Mar 2029" (about 28 px of it) was cut to "Mar 202" with 18 px,
        // "26 Feb" (about 20 px) lost its last pixels.
        .margin_right(if long_range { 32 } else { 24 })
        .x_label_area_size(30)
        .y_label_area_size(if c.y_label.is_empty() { 44 } else { 62 })
        .build_cartesian_2d(x0..x1, y0..y1)?;
    chart
        .configure_mesh()
        .disable_x_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(GRID.stroke_width(1))
        .axis_style(AXIS.stroke_width(1))
        .label_style(text(LABEL_SIZE, MUTED))
        .axis_desc_style(text(LABEL_SIZE, MUTED))
        .y_desc(c.y_label.as_str())
        // About one date label per 90 px of drawing: seven across the 720 px drawing, four
        // across the 380 px one for phones, where seven ran into each other ("20 Apr25 May").
        .x_labels((plot_area.dim_in_pixel().0 / 90).clamp(3, 7) as usize)
        .y_labels(6)
        .x_label_formatter(&date_fmt)
        .y_label_formatter(&y_fmt)
        .draw()?;

    let mut labelled = std::collections::BTreeSet::new();
    for s in &c.spans {
        let (from, to) = (s.from.min(s.to), s.to.max(s.from));
        let from = from.max(x0);
        // `to` is inclusive: shade through the end of that day.
        let to = (to + Duration::days(1)).min(x1);
        if to <= from {
            continue;
        }
        let fill = span_fill(s.kind);
        chart.draw_series(std::iter::once(Rectangle::new(
            [(from, y1), (to, y0)],
            fill.filled(),
        )))?;
        if !s.label.is_empty() && labelled.insert(s.label.clone()) {
            swatches.push((s.label.clone(), Swatch::Fill(fill)));
        }
    }

    for (i, b) in c.bands.iter().enumerate() {
        let mut all = b.points.clone();
        all.sort_by_key(|p| p.0);
        let (colour, alpha) = BAND_COLOURS[i % BAND_COLOURS.len()];
        let fill = colour.mix(alpha);
        let mut drawn = false;
        // A non-finite bound is a break: the band is drawn in pieces and never bridges it.
        for pts in finite_runs(&all, |p| p.1.is_finite() && p.2.is_finite()) {
            if pts.len() < 2 {
                continue;
            }
            let outline: Vec<(NaiveDate, f64)> = pts
                .iter()
                .map(|p| (p.0, p.2.max(p.1)))
                .chain(pts.iter().rev().map(|p| (p.0, p.1.min(p.2))))
                .collect();
            chart.draw_series(std::iter::once(Polygon::new(outline, fill.filled())))?;
            drawn = true;
        }
        if drawn && !b.label.is_empty() {
            swatches.push((b.label.clone(), Swatch::Fill(fill)));
        }
    }

    for h in c.hlines.iter().filter(|h| h.y.is_finite()) {
        let style = MUTED.stroke_width(1);
        chart.draw_series(DashedLineSeries::new(
            [(x0, h.y), (x1, h.y)],
            5u32,
            4u32,
            style,
        ))?;
        // Named in the legend rather than beside the line, where a trend crossing the
        // reference line would run through its label.
        if !h.label.is_empty() {
            swatches.push((h.label.clone(), Swatch::Dashed(style)));
        }
    }

    // The day someone left: a rule the height of the plot, with its words at the top on the
    // side with more room, so the weigh-ins after it are seen to be after it.
    for v in c.vlines.iter().filter(|v| v.date >= x0 && v.date <= x1) {
        let style = INK.stroke_width(2);
        chart.draw_series(std::iter::once(PathElement::new(
            vec![(v.date, y0), (v.date, y1)],
            style,
        )))?;
        if !v.tag.is_empty() {
            let right_half = (v.date - x0).num_days() * 2 > (x1 - x0).num_days();
            let (dx, h) = if right_half {
                (-5, HPos::Right)
            } else {
                (5, HPos::Left)
            };
            chart.draw_series(std::iter::once(
                EmptyElement::at((v.date, y1))
                    + Text::new(
                        v.tag.clone(),
                        (dx, 4),
                        text(LABEL_SIZE - 1.0, INK).pos(Pos::new(h, VPos::Top)),
                    ),
            ))?;
        }
        if !v.label.is_empty() {
            swatches.push((v.label.clone(), Swatch::Rule(style)));
        }
    }

    for (i, l) in c.lines.iter().enumerate() {
        let colour = LINE_COLOURS[i % LINE_COLOURS.len()];
        let mut all = l.points.clone();
        all.sort_by_key(|p| p.0);
        let line_style = colour.stroke_width(2);
        // A non-finite value is a break: the line is drawn in pieces and never bridges it
        // (a week withheld from a group chart must not be drawn as an interpolated value).
        let mut drawn = false;
        for pts in finite_runs(&all, |p| p.1.is_finite()) {
            drawn |= !pts.is_empty();
            match l.style {
                LineStyle::Dots => chart.draw_series(
                    pts.iter()
                        .map(|&p| Circle::new(p, 3, colour.mix(0.8).filled())),
                )?,
                _ if pts.len() == 1 => {
                    chart.draw_series(pts.iter().map(|&p| Circle::new(p, 3, colour.filled())))?
                }
                LineStyle::Solid => {
                    chart.draw_series(PlotLine::new(pts.iter().copied(), line_style))?
                }
                LineStyle::Dashed => chart.draw_series(DashedLineSeries::new(
                    pts.iter().copied(),
                    7u32,
                    5u32,
                    line_style,
                ))?,
            };
        }
        // A series with nothing drawn (no food log: no logged intake) has no legend entry: the
        // legend listed "Logged intake" beside a chart without it.
        if drawn && !l.label.is_empty() {
            swatches.push((
                l.label.clone(),
                match l.style {
                    LineStyle::Dots => Swatch::Dot(colour),
                    LineStyle::Solid => Swatch::Line(line_style),
                    LineStyle::Dashed => Swatch::Dashed(line_style),
                },
            ));
        }
    }
    match strip {
        Some(strip) => draw_legend_strip(&strip, &swatches),
        None => Ok(()),
    }
}

/// The runs of consecutive points that pass `ok`, in order; a point that fails it ends a run
/// (a gap in a series: nothing is drawn across it).
fn finite_runs<T: Copy>(pts: &[T], ok: impl Fn(&T) -> bool) -> Vec<Vec<T>> {
    let mut runs: Vec<Vec<T>> = Vec::new();
    let mut cur: Vec<T> = Vec::new();
    for p in pts {
        if ok(p) {
            cur.push(*p);
        } else if !cur.is_empty() {
            runs.push(std::mem::take(&mut cur));
        }
    }
    if !cur.is_empty() {
        runs.push(cur);
    }
    runs
}

/// The mark shown beside a legend entry, as the series draws it.
#[derive(Clone, Copy)]
enum Swatch {
    /// A filled box (span or band).
    Fill(RGBAColor),
    /// A dot (weigh-ins).
    Dot(RGBColor),
    /// A solid line.
    Line(ShapeStyle),
    /// A dashed line.
    Dashed(ShapeStyle),
    /// A vertical rule.
    Rule(ShapeStyle),
}

/// Draws legend entries in columns, top to bottom then left to right, filling `area` (the strip
/// below the plot).
fn draw_legend_strip<DB: DrawingBackend>(
    area: &DrawingArea<DB, Shift>,
    entries: &[(String, Swatch)],
) -> DrawResult<DB> {
    let (w, _) = area.dim_in_pixel();
    let cols = legend_columns(w);
    let rows = entries.len().div_ceil(cols).max(1);
    let col_w = (w as i32 - 2 * LEGEND_X) / cols as i32;
    for (i, (label, swatch)) in entries.iter().enumerate() {
        let x = LEGEND_X + (i / rows) as i32 * col_w;
        let y = LEGEND_MARGIN as i32
            + 4
            + (i % rows) as i32 * LEGEND_LINE_PX as i32
            + LEGEND_LINE_PX as i32 / 2;
        match *swatch {
            Swatch::Fill(fill) => area.draw(&Rectangle::new(
                [(x, y - 6), (x + 18, y + 6)],
                fill.filled(),
            ))?,
            Swatch::Dot(colour) => area.draw(&Circle::new((x + 9, y), 3, colour.filled()))?,
            Swatch::Line(style) => {
                area.draw(&PathElement::new(vec![(x, y), (x + 18, y)], style))?
            }
            Swatch::Dashed(style) => {
                area.draw(&PathElement::new(vec![(x, y), (x + 7, y)], style))?;
                area.draw(&PathElement::new(vec![(x + 11, y), (x + 18, y)], style))?;
            }
            Swatch::Rule(style) => area.draw(&PathElement::new(
                vec![(x + 9, y - 7), (x + 9, y + 7)],
                style,
            ))?,
        }
        let size = LABEL_SIZE - 1.0;
        let max_px = (col_w - 30) as f32;
        area.draw(&Text::new(
            fit_label(label, max_px, size),
            (x + 24, y),
            text(size, INK).pos(Pos::new(HPos::Left, VPos::Center)),
        ))?;
    }
    Ok(())
}

fn draw_bar_chart<DB: DrawingBackend>(
    c: &BarChart,
    whole: &DrawingArea<DB, Shift>,
    legend: u32,
) -> DrawResult<DB> {
    if c.bars.is_empty() {
        return draw_empty(&c.title, whole);
    }
    // The target line is named in a strip below the plot, never over the bars.
    let (plot, strip) = if legend > 0 {
        let (_, h) = whole.dim_in_pixel();
        let (top, bottom) = whole.split_vertically(h.saturating_sub(legend));
        (top, Some(bottom))
    } else {
        (whole.clone(), None)
    };
    let root = &plot;
    let n = c.bars.len();
    let values = c
        .bars
        .iter()
        .filter(|b| !b.suppressed && b.value.is_finite())
        .map(|b| b.value)
        .chain(c.target.filter(|t| t.is_finite()));
    let (lo, hi) = values.fold((0.0f64, f64::NEG_INFINITY), |(a, b), v| {
        (a.min(v), b.max(v))
    });
    let hi = if hi.is_finite() && hi > lo {
        hi
    } else {
        lo + 1.0
    };
    // Bars grow from zero; head-room above the tallest bar holds its value label.
    let (y0, y1) = (
        if lo < 0.0 { lo * 1.12 } else { 0.0 },
        hi + (hi - lo) * 0.14,
    );
    let any_suppressed = c.bars.iter().any(|b| b.suppressed);

    let mut chart = ChartBuilder::on(root)
        .caption(&c.title, title_text(&c.title, root.dim_in_pixel().0))
        .margin(10)
        .margin_right(18)
        .x_label_area_size(if any_suppressed { 48 } else { 30 })
        .y_label_area_size(if c.y_label.is_empty() { 44 } else { 62 })
        .build_cartesian_2d(0f64..n as f64, y0..y1)?;
    let y_fmt = |v: &f64| fmt_num(*v, 2);
    chart
        .configure_mesh()
        .disable_x_mesh()
        .light_line_style(TRANSPARENT)
        .bold_line_style(GRID.stroke_width(1))
        .axis_style(AXIS.stroke_width(1))
        .label_style(text(LABEL_SIZE, MUTED))
        .axis_desc_style(text(LABEL_SIZE, MUTED))
        .y_desc(c.y_label.as_str())
        .x_labels(0)
        .y_labels(6)
        .y_label_formatter(&y_fmt)
        .draw()?;

    let slot_px = {
        let a = chart.backend_coord(&(0.0, 0.0));
        let b = chart.backend_coord(&(1.0, 0.0));
        (b.0 - a.0).max(1) as f32
    };
    // With many bars (a 26-week program) not every label fits under its bar: label every
    // `step`-th bar so the labels do not collide, and print values above bars only when the
    // bars are wide enough to hold them (the data table beside the chart has every value).
    let label_px = {
        let m = font::face(Face::Regular);
        let em = LABEL_SIZE as f32 / SVG_FONT_DIVISOR;
        c.bars
            .iter()
            .map(|b| m.width(&b.label, em))
            .fold(0.0f32, f32::max)
            + 6.0
    };
    let step = ((label_px / slot_px).ceil() as usize).max(1);
    let show_values = slot_px >= 26.0;
    let value_style = text(LABEL_SIZE - 1.0, INK).pos(Pos::new(HPos::Center, VPos::Bottom));
    let label_style = text(LABEL_SIZE, MUTED).pos(Pos::new(HPos::Center, VPos::Top));
    let outline = AXIS.stroke_width(1);
    for (i, b) in c.bars.iter().enumerate() {
        let (l, r) = (i as f64 + 0.18, i as f64 + 0.82);
        if b.suppressed || !b.value.is_finite() {
            let h = y0.max(0.0) + (y1 - y0) * 0.3;
            chart.draw_series(std::iter::once(Rectangle::new(
                [(l, y0.max(0.0)), (r, h)],
                outline,
            )))?;
            let mid = chart.backend_coord(&(i as f64 + 0.5, (y0.max(0.0) + h) / 2.0));
            root.draw(&Text::new(
                "*",
                mid,
                text(LABEL_SIZE + 2.0, MUTED).pos(Pos::new(HPos::Center, VPos::Center)),
            ))?;
        } else {
            chart.draw_series(std::iter::once(Rectangle::new(
                [(l, 0.0), (r, b.value)],
                OI_BLUE.filled(),
            )))?;
            if show_values {
                let top = chart.backend_coord(&(i as f64 + 0.5, b.value.max(0.0)));
                root.draw(&Text::new(
                    fmt_num(b.value, 1),
                    (top.0, top.1 - 3),
                    value_style.clone(),
                ))?;
            }
        }
        if i % step == 0 {
            let base = chart.backend_coord(&(i as f64 + 0.5, y0));
            root.draw(&Text::new(
                fit_label(&b.label, slot_px * step as f32 - 4.0, LABEL_SIZE),
                (base.0, base.1 + 7),
                label_style.clone(),
            ))?;
        }
    }
    if let Some(t) = c.target.filter(|t| t.is_finite()) {
        chart.draw_series(DashedLineSeries::new(
            [(0.0, t), (n as f64, t)],
            6u32,
            4u32,
            OI_VERMILLION.stroke_width(2),
        ))?;
        if let Some(strip) = &strip {
            draw_legend_strip(
                strip,
                &[(
                    format!("Target: {}", fmt_num(t, 1)),
                    Swatch::Dashed(OI_VERMILLION.stroke_width(2)),
                )],
            )?;
        }
    }
    if any_suppressed {
        let (_, h) = root.dim_in_pixel();
        root.draw(&Text::new(
            "* not shown: too few people to report",
            (14, h as i32 - 8),
            text(LABEL_SIZE - 2.0, MUTED).pos(Pos::new(HPos::Left, VPos::Bottom)),
        ))?;
    }
    Ok(())
}

#[cfg(test)]
pub(crate) mod tests {
    /// A steady person's energy chart (weekly energy use 2,830–2,833 kcal/day) was ticked in
    /// half kilocalories; its axis now spans at least 2 % of the values' size. Wider ranges, and
    /// small values around zero (a group's mean % change), keep their own span.
    #[test]
    fn a_narrow_value_range_is_widened_to_a_share_of_its_size() {
        let (a, b) = super::padded(2830.0, 2833.0);
        assert!((b - a - 2833.0 * 0.02 * 1.12).abs() < 1e-9, "{a} {b}");
        assert!(((a + b) / 2.0 - 2831.5).abs() < 1e-9);
        let (a, b) = super::padded(70.0, 80.0);
        assert!(
            (a - 69.4).abs() < 1e-9 && (b - 80.6).abs() < 1e-9,
            "{a} {b}"
        );
        let (a, b) = super::padded(-0.4, -0.2);
        assert!(
            (a + 0.412).abs() < 1e-9 && (b + 0.188).abs() < 1e-9,
            "{a} {b}"
        );
    }

    /// Width of `text` in DejaVu Sans at `size` px, from its advance widths in em (the letters
    /// of English month names exactly; any other letter taken as wide as `W`).
    fn text_width(text: &str, size: f64) -> f64 {
        text.chars()
            .map(|c| match c {
                '0'..='9' => 0.636,
                ' ' => 0.3179,
                'J' => 0.295,
                'F' => 0.575,
                'M' => 0.863,
                'A' => 0.684,
                'S' => 0.635,
                'O' => 0.787,
                'N' => 0.748,
                'D' => 0.770,
                'a' => 0.613,
                'b' | 'g' | 'p' => 0.635,
                'c' => 0.550,
                'e' => 0.615,
                'l' => 0.278,
                'n' | 'u' => 0.634,
                'o' => 0.612,
                'r' => 0.411,
                't' => 0.392,
                'v' | 'y' => 0.592,
                _ => 0.989,
            })
            .sum::<f64>()
            * size
    }

    /// The centred texts of an SVG drawing: (x, font size, text).
    fn centred_texts(svg: &str) -> Vec<(f64, f64, String)> {
        svg.split("<text ")
            .skip(1)
            .filter(|t| t.contains("text-anchor=\"middle\""))
            .map(|t| {
                let t = format!(" {t}");
                let attr = |name: &str| -> f64 {
                    let from = t.find(&format!(" {name}=\"")).unwrap() + name.len() + 3;
                    t[from..from + t[from..].find('"').unwrap()]
                        .parse()
                        .unwrap()
                };
                let body = &t[t.find('>').unwrap() + 1..t.find("</text>").unwrap()];
                (attr("x"), attr("font-size"), body.trim().to_string())
            })
            .collect()
    }

    /// A three-year program's weight chart ended its date axis with "Mar 202" in the PDF and
    /// the HTML (attack18): "Mar 2029" was centred on the plot's right edge, 18 px from the
    /// drawing's, and half of it is 27 px. No date label may run past the drawing's edge, for
    /// long and short ranges and whichever day the axis ends on.
    #[test]
    fn no_date_label_runs_past_the_drawings_edge() {
        let start = NaiveDate::from_ymd_opt(2026, 1, 1).unwrap();
        let mut checked = 0;
        for days in (20..130).step_by(9).chain((380..1200).step_by(23)) {
            let end = start + Duration::days(days);
            let line: Vec<(NaiveDate, f64)> = (0..=days)
                .map(|i| (start + Duration::days(i), 100.0 - i as f64 * 0.01))
                .collect();
            let chart = Chart::Line(LineChart {
                title: "Weight".into(),
                y_label: "kg".into(),
                lines: vec![LineSeries {
                    label: "Trend".into(),
                    points: line,
                    style: LineStyle::Solid,
                }],
                bands: vec![],
                spans: vec![],
                hlines: vec![],
                vlines: vec![],
                alt_text: format!("to {end}"),
                x_span: None,
            });
            for width in [720, 380] {
                let svg = to_svg(&chart, width, 300);
                for (x, size, text) in centred_texts(&svg) {
                    let half = text_width(&text, size) / 2.0;
                    assert!(
                        x + half <= width as f64 && x - half >= 0.0,
                        "{days} days, {width} px: `{text}` at {x} runs to {}",
                        x + half
                    );
                    checked += 1;
                }
            }
        }
        assert!(checked > 200, "{checked}");
    }

    use super::*;

    fn d(m: u32, day: u32) -> NaiveDate {
        NaiveDate::from_ymd_opt(2025, m, day).unwrap()
    }

    pub(crate) fn sample_line() -> Chart {
        let weights: Vec<(NaiveDate, f64)> = (0..60)
            .map(|i| {
                (
                    d(3, 1) + Duration::days(i),
                    92.0 - i as f64 * 0.08 + ((i * 7) % 5) as f64 * 0.2,
                )
            })
            .collect();
        let trend: Vec<(NaiveDate, f64)> = (0..60)
            .map(|i| (d(3, 1) + Duration::days(i), 92.3 - i as f64 * 0.08))
            .collect();
        Chart::Line(LineChart {
            title: "Weight trend — Łucja Nguyễn-Øberg".into(),
            y_label: "kg".into(),
            lines: vec![
                LineSeries {
                    label: "weigh-ins".into(),
                    points: weights,
                    style: LineStyle::Dots,
                },
                LineSeries {
                    label: "trend <smoothed>".into(),
                    points: trend,
                    style: LineStyle::Solid,
                },
                LineSeries {
                    label: "forecast".into(),
                    points: vec![(d(4, 29), 87.6), (d(5, 29), 85.9)],
                    style: LineStyle::Dashed,
                },
            ],
            bands: vec![BandSeries {
                label: "95 % interval".into(),
                points: (0..60)
                    .map(|i| {
                        (
                            d(3, 1) + Duration::days(i),
                            91.5 - i as f64 * 0.08,
                            93.1 - i as f64 * 0.08,
                        )
                    })
                    .collect(),
            }],
            spans: vec![
                Span {
                    label: "plateau".into(),
                    from: d(3, 20),
                    to: d(4, 2),
                    kind: SpanKind::Plateau,
                },
                Span {
                    label: "forecast".into(),
                    from: d(4, 29),
                    to: d(5, 29),
                    kind: SpanKind::Forecast,
                },
            ],
            hlines: vec![HLine {
                label: "goal 85 kg".into(),
                y: 85.0,
            }],
            vlines: vec![],
            alt_text: "Weight fell from 92 to 87.5 kg over 60 days & a plateau in March".into(),
            x_span: None,
        })
    }

    /// A group chart drew its mean line straight across weeks whose mean was withheld, as if
    /// they were data: a non-finite value is now a gap in the line and in its band.
    #[test]
    fn a_non_finite_value_breaks_the_line_and_the_band() {
        let chart = |gap: bool| {
            let v = |w: u32, x: f64| {
                if gap && (3..=4).contains(&w) {
                    f64::NAN
                } else {
                    x
                }
            };
            let days: Vec<(NaiveDate, f64)> = (1..=6)
                .map(|w| {
                    (
                        d(1, 1) + Duration::days(7 * i64::from(w)),
                        -0.5 * f64::from(w),
                    )
                })
                .collect();
            Chart::Line(LineChart {
                title: "Mean change".into(),
                y_label: "%".into(),
                lines: vec![LineSeries {
                    label: "mean".into(),
                    points: days
                        .iter()
                        .zip(1..)
                        .map(|(p, w)| (p.0, v(w, p.1)))
                        .collect(),
                    style: LineStyle::Solid,
                }],
                bands: vec![BandSeries {
                    label: "95 % CI".into(),
                    points: days
                        .iter()
                        .zip(1..)
                        .map(|(p, w)| (p.0, v(w, p.1 - 0.3), v(w, p.1 + 0.3)))
                        .collect(),
                }],
                spans: vec![],
                hlines: vec![],
                vlines: vec![],
                alt_text: String::new(),
                x_span: None,
            })
        };
        let count = |svg: &str, tag: &str| svg.matches(tag).count();
        let (whole, broken) = (
            to_svg(&chart(false), 720, 340),
            to_svg(&chart(true), 720, 340),
        );
        assert_eq!(count(&broken, "<polyline"), count(&whole, "<polyline") + 1);
        assert_eq!(count(&broken, "<polygon"), count(&whole, "<polygon") + 1);
        assert_eq!(
            finite_runs(&[1.0, f64::NAN, 2.0, 3.0, f64::NAN], |x| x.is_finite()).len(),
            2
        );
    }

    #[test]
    fn svg_is_standalone_escaped_and_script_free() {
        let svg = to_svg(&sample_line(), 720, 340);
        assert!(svg.starts_with("<svg"), "{}", &svg[..60]);
        assert!(svg.trim_end().ends_with("</svg>"));
        assert!(!svg.to_lowercase().contains("<script"));
        assert!(!svg.contains("href"));
        assert!(
            svg.contains("trend &lt;smoothed&gt;"),
            "legend text escaped"
        );
        assert!(!svg.contains("<smoothed>"));
        assert!(svg.contains(
            "<title>Weight fell from 92 to 87.5 kg over 60 days &amp; a plateau in March</title>"
        ));
        assert!(svg.contains("Łucja Nguyễn-Øberg"));
        assert!(svg.contains("goal 85 kg"));
    }

    /// WCAG 2.1 relative luminance of an sRGB colour (W3C, WCAG 2.1, definition of relative
    /// luminance).
    fn luminance(hex: &str) -> f64 {
        let c = |i: usize| {
            let v = u8::from_str_radix(&hex[i..i + 2], 16).unwrap() as f64 / 255.0;
            if v <= 0.04045 {
                v / 12.92
            } else {
                ((v + 0.055) / 1.055).powf(2.4)
            }
        };
        0.2126 * c(0) + 0.7152 * c(2) + 0.0722 * c(4)
    }

    #[test]
    fn every_chart_text_has_at_least_4_5_to_1_contrast_on_white() {
        let bars = Chart::Bars(BarChart {
            title: "Minutes per week".into(),
            y_label: "min".into(),
            bars: vec![
                Bar {
                    label: "A".into(),
                    value: 120.0,
                    suppressed: false,
                },
                Bar {
                    label: "B".into(),
                    value: 0.0,
                    suppressed: true,
                },
            ],
            target: Some(150.0),
            alt_text: String::new(),
        });
        let mut seen = 0;
        for svg in [
            to_svg(&sample_line(), 720, 340),
            to_svg_narrow(&sample_line(), 380, 300),
            to_svg(&bars, 600, 300),
        ] {
            for tag in svg.split("<text").skip(1) {
                let open = &tag[..tag.find('>').unwrap()];
                let fill = open
                    .split("fill=\"#")
                    .nth(1)
                    .map(|r| &r[..6])
                    .unwrap_or_else(|| panic!("text without a fill colour: {open}"));
                // WCAG 2.1 contrast ratio against white (success criterion 1.4.3: 4.5:1).
                let ratio = 1.05 / (luminance(fill) + 0.05);
                assert!(ratio >= 4.5, "#{fill} gives {ratio:.2}:1 in {open}");
                seen += 1;
            }
        }
        assert!(seen > 20, "only {seen} text elements checked");
    }

    /// `(y, text)` of every `<text>` element of an SVG from plotters.
    fn svg_text_positions(svg: &str) -> Vec<(f64, String)> {
        svg.split("<text")
            .skip(1)
            .map(|tag| {
                let y = tag
                    .split(" y=\"")
                    .nth(1)
                    .and_then(|r| r.split('"').next())
                    .expect("y");
                let body = &tag[tag.find('>').unwrap() + 1..tag.find("</text>").unwrap()];
                (y.parse().expect("numeric y"), body.trim().to_string())
            })
            .collect()
    }

    /// The date labels along the x axis do not run into each other, on the phone drawing
    /// (380 px) as on the wide one, over a program's nine months: seven labels across the
    /// phone drawing printed "20 Apr25 May 29 Jun".
    #[test]
    fn date_labels_keep_apart_on_the_narrow_drawing() {
        let mut chart = sample_line();
        let Chart::Line(line) = &mut chart else {
            unreachable!()
        };
        line.lines[0].points = (0..265)
            .map(|i| (d(4, 1) + Duration::days(i), 92.0 - i as f64 * 0.02))
            .collect();
        for (width, svg) in [
            (380, to_svg_narrow(&chart, 380, 300)),
            (720, to_svg(&chart, 720, 340)),
        ] {
            // (x, text) of the date labels: "12 Oct".
            let mut dates: Vec<(f64, String)> = svg
                .split("<text")
                .skip(1)
                .filter_map(|tag| {
                    let x: f64 = tag.split(" x=\"").nth(1)?.split('"').next()?.parse().ok()?;
                    let body = tag[tag.find('>')? + 1..tag.find("</text>")?].trim();
                    let (day, month) = body.split_once(' ')?;
                    (day.parse::<u32>().is_ok() && month.len() == 3).then(|| (x, body.to_string()))
                })
                .collect();
            dates.sort_by(|a, b| a.0.total_cmp(&b.0));
            assert!(dates.len() >= 3, "{width}: {dates:?}");
            // Each label's width at the label size (font-size = LABEL_SIZE / 1.24), with
            // 0.6 em a character (generous for these sans-serif digits and letters), and a gap.
            let em = LABEL_SIZE / 1.24;
            for w in dates.windows(2) {
                let room =
                    (w[0].1.chars().count() + w[1].1.chars().count()) as f64 / 2.0 * 0.6 * em;
                assert!(
                    w[1].0 - w[0].0 >= room + 6.0,
                    "{width}: {:?} and {:?} overlap in {dates:?}",
                    w[0],
                    w[1]
                );
            }
        }
    }

    #[test]
    fn narrow_chart_puts_the_whole_legend_below_the_plot() {
        let chart = sample_line();
        let Chart::Line(line) = &chart else {
            unreachable!()
        };
        // 3 lines, 1 band, 1 reference line, 2 distinct span labels: 4 rows of two.
        assert_eq!(legend_entries(line), 7);
        let strip = legend_strip_height(line, 380);
        assert_eq!(strip, 4 * LEGEND_LINE_PX + 2 * LEGEND_MARGIN + 8);
        let svg = to_svg_narrow(&chart, 380, 300);
        assert!(
            svg.contains(&format!("width=\"380\" height=\"{}\"", 300 + strip)),
            "{:.200}",
            svg
        );
        let texts = svg_text_positions(&svg);
        for label in [
            "weigh-ins",
            "trend &lt;smoothed&gt;",
            "forecast",
            "95 % interval",
            "plateau",
        ] {
            let ys: Vec<f64> = texts.iter().filter(|t| t.1 == label).map(|t| t.0).collect();
            assert!(!ys.is_empty(), "legend entry {label} missing");
            for y in ys {
                assert!(
                    y >= 300.0 && y < f64::from(300 + strip),
                    "{label} at y = {y}, plot ends at 300"
                );
            }
        }
    }

    #[test]
    fn wide_and_pdf_legends_sit_below_the_plot_and_name_the_reference_line() {
        let chart = sample_line();
        let Chart::Line(line) = &chart else {
            unreachable!()
        };
        // Three columns at the wide size: 7 entries in 3 rows.
        let strip = legend_strip_height(line, 720);
        assert_eq!(strip, 3 * LEGEND_LINE_PX + 2 * LEGEND_MARGIN + 8);
        assert_eq!(chart.pdf_canvas(), (720, 300 + strip));
        let svg = to_svg(&chart, 720, 300);
        assert!(svg.contains(&format!("width=\"720\" height=\"{}\"", 300 + strip)));
        let texts = svg_text_positions(&svg);
        let labels = legend_labels(line);
        assert_eq!(labels.len(), 7);
        for label in &labels {
            let label = label.replace('<', "&lt;").replace('>', "&gt;");
            let ys: Vec<f64> = texts.iter().filter(|t| t.1 == label).map(|t| t.0).collect();
            assert!(!ys.is_empty(), "legend entry {label} missing");
            // Inside the strip, so below every plotted point and axis label.
            assert!(ys.iter().all(|y| *y >= 300.0), "{label} at {ys:?}");
        }
        // The reference line's label is only in the legend, never on the line in the plot.
        let goal = &line.hlines[0].label;
        assert!(texts.iter().filter(|t| &t.1 == goal).all(|t| t.0 >= 300.0));
    }

    /// The text of each legend entry of `c`.
    fn legend_labels(c: &LineChart) -> Vec<String> {
        let mut spans: Vec<String> = c.spans.iter().map(|s| s.label.clone()).collect();
        spans.dedup();
        c.lines
            .iter()
            .map(|l| l.label.clone())
            .chain(c.bands.iter().map(|b| b.label.clone()))
            .chain(c.hlines.iter().map(|h| h.label.clone()))
            .chain(spans)
            .filter(|l| !l.is_empty())
            .collect()
    }

    /// A participant with no food log: the energy chart's "Logged intake" series has no
    /// points, and the legend still listed it (and made room for it).
    #[test]
    fn a_series_with_nothing_drawn_has_no_legend_entry() {
        let Chart::Line(mut c) = sample_line() else {
            unreachable!()
        };
        let before = legend_entries(&c);
        c.lines.push(LineSeries {
            label: "Logged intake".into(),
            points: vec![],
            style: LineStyle::Dots,
        });
        c.lines.push(LineSeries {
            label: "Withheld".into(),
            points: vec![(c.lines[0].points[0].0, f64::NAN)],
            style: LineStyle::Solid,
        });
        let mut band = c.bands[0].clone();
        band.label = "Empty band".into();
        band.points.truncate(1);
        c.bands.push(band);
        assert_eq!(legend_entries(&c), before);
        let chart = Chart::Line(c);
        for svg in [to_svg(&chart, 720, 300), to_svg_narrow(&chart, 380, 300)] {
            let texts = svg_text_positions(&svg);
            for label in ["Logged intake", "Withheld", "Empty band"] {
                assert!(!texts.iter().any(|t| t.1 == label), "{label} in the legend");
            }
            assert!(texts.iter().any(|t| t.1 == "weigh-ins"));
        }
    }

    #[test]
    fn shaded_areas_have_distinguishable_colours() {
        // Every fill a report's line chart shows (the three span kinds and the first two bands),
        // over white, differs from every other by a clear margin in RGB: at least 25 of 441
        // (common practice, not a standard; the old forecast band and regain period, orange
        // and vermillion tints, were 23 apart and of one hue).
        let over_white = |c: RGBAColor| {
            let a = c.3;
            [c.0, c.1, c.2].map(|v| f64::from(v) * a + 255.0 * (1.0 - a))
        };
        let mut fills: Vec<(String, [f64; 3])> =
            [SpanKind::Plateau, SpanKind::Regain, SpanKind::Forecast]
                .iter()
                .map(|k| (format!("{k:?}"), over_white(span_fill(*k))))
                .collect();
        for (i, (c, a)) in BAND_COLOURS.iter().take(2).enumerate() {
            fills.push((format!("band {i}"), over_white(c.mix(*a))));
        }
        for (i, (na, a)) in fills.iter().enumerate() {
            for (nb, b) in &fills[i + 1..] {
                let d = a
                    .iter()
                    .zip(b)
                    .map(|(x, y)| (x - y).powi(2))
                    .sum::<f64>()
                    .sqrt();
                assert!(d >= 25.0, "{na} and {nb} differ by only {d:.1}");
            }
        }
    }

    #[test]
    fn two_bands_never_share_a_colour() {
        let Chart::Line(mut c) = sample_line() else {
            unreachable!()
        };
        let mut second = c.bands[0].clone();
        second.label = "forecast range".into();
        for p in &mut second.points {
            p.1 -= 2.0;
            p.2 -= 2.0;
        }
        c.bands.push(second);
        let svg = to_svg(&Chart::Line(c), 720, 340);
        let fills: std::collections::BTreeSet<&str> = svg
            .split("<polygon")
            .skip(1)
            .filter_map(|p| p.split("fill=\"").nth(1).map(|r| &r[..7]))
            .collect();
        assert!(fills.len() >= 2, "{fills:?}");
    }

    #[test]
    fn svg_is_deterministic() {
        assert_eq!(
            to_svg(&sample_line(), 640, 320),
            to_svg(&sample_line(), 640, 320)
        );
    }

    #[test]
    fn hostile_text_cannot_break_out_of_the_svg() {
        let chart = Chart::Bars(BarChart {
            title: "</svg><script>alert(1)</script>".into(),
            y_label: "\"onload=x".into(),
            bars: vec![Bar {
                label: "<img src=x>".into(),
                value: 3.0,
                suppressed: false,
            }],
            target: None,
            alt_text: "\" onmouseover=\"x".into(),
        });
        let svg = to_svg(&chart, 400, 300);
        assert!(!svg.to_lowercase().contains("<script"));
        assert!(!svg.contains("<img"));
        assert_eq!(svg.matches("</svg>").count(), 1);
        assert!(!svg.contains("\" onmouseover"));
    }

    #[test]
    fn empty_and_degenerate_charts_do_not_panic() {
        let empty_line = Chart::Line(LineChart {
            title: "Nothing yet".into(),
            lines: vec![LineSeries {
                label: "w".into(),
                points: vec![],
                style: LineStyle::Solid,
            }],
            bands: vec![BandSeries {
                label: "b".into(),
                points: vec![],
            }],
            ..Default::default()
        });
        let svg = to_svg(&empty_line, 600, 300);
        assert!(svg.contains("No data for this period"));

        let one_point = Chart::Line(LineChart {
            title: "One weigh-in".into(),
            lines: vec![LineSeries {
                label: "w".into(),
                points: vec![(d(3, 1), 80.0)],
                style: LineStyle::Solid,
            }],
            ..Default::default()
        });
        assert!(to_svg(&one_point, 600, 300).contains("<circle"));

        let nan = Chart::Line(LineChart {
            title: "NaN".into(),
            lines: vec![LineSeries {
                label: "w".into(),
                points: vec![(d(3, 1), f64::NAN), (d(3, 2), f64::INFINITY)],
                style: LineStyle::Dashed,
            }],
            ..Default::default()
        });
        assert!(to_svg(&nan, 600, 300).contains("No data for this period"));

        let no_bars = Chart::Bars(BarChart {
            title: "None".into(),
            ..Default::default()
        });
        assert!(to_svg(&no_bars, 600, 300).contains("No data for this period"));

        let all_suppressed = Chart::Bars(BarChart {
            title: "Small groups".into(),
            y_label: "%".into(),
            bars: vec![
                Bar {
                    label: "A".into(),
                    value: 0.0,
                    suppressed: true,
                },
                Bar {
                    label: "B".into(),
                    value: f64::NAN,
                    suppressed: true,
                },
            ],
            target: Some(5.0),
            alt_text: String::new(),
        });
        let svg = to_svg(&all_suppressed, 600, 300);
        assert!(svg.contains("too few people"));
        // The target is named in the strip below the plot, not over the bars.
        let texts = svg_text_positions(&svg);
        let target: Vec<f64> = texts
            .iter()
            .filter(|t| t.1 == "Target: 5")
            .map(|t| t.0)
            .collect();
        assert!(
            !target.is_empty() && target.iter().all(|y| *y >= 300.0),
            "{target:?}"
        );
        // No value label is printed for a suppressed bar (the value 0 would otherwise show).
        assert!(!svg.contains(">0</text>"));
    }

    #[test]
    fn label_width_uses_font_metrics_not_bytes() {
        let style = text(LABEL_SIZE, INK);
        let ascii = estimate_text_size("Nguyen", &style).0;
        let accented = estimate_text_size("Nguyễn", &style).0;
        // "ễ" is three UTF-8 bytes; with real metrics it is exactly as wide as "e".
        assert_eq!(ascii, accented);
        assert!(estimate_text_size("WWW", &style).0 > estimate_text_size("iii", &style).0 * 2);
    }

    #[test]
    fn fmt_num_trims() {
        assert_eq!(fmt_num(72.50, 2), "72.5");
        assert_eq!(fmt_num(80.0, 2), "80");
        assert_eq!(fmt_num(-0.001, 1), "0");
        assert_eq!(fmt_num(-2.0, 1), "\u{2212}2");
        assert_eq!(fmt_num(91.349, 1), "91.3");
        // Thousands are grouped as in the report's text.
        assert_eq!(fmt_num(2832.0, 2), "2,832");
        assert_eq!(fmt_num(2831.5, 2), "2,831.5");
        assert_eq!(fmt_num(-12345.25, 2), "\u{2212}12,345.25");
        assert_eq!(fmt_num(999.0, 2), "999");
        assert_eq!(fmt_num(1000.0, 1), "1,000");
    }
}

#[cfg(test)]
mod title_tests {
    use super::tests::sample_line;
    use super::*;

    /// The drawn title (the bold `<text>`): its font size and its text.
    fn drawn_title(svg: &str) -> (f32, String) {
        let at = svg.find("font-weight=\"bold\"").expect("a bold title");
        let start = svg[..at].rfind("<text").unwrap();
        let tag = &svg[start..];
        let size: f32 = tag
            .split("font-size=\"")
            .nth(1)
            .and_then(|r| r.split('"').next())
            .and_then(|v| v.parse().ok())
            .unwrap();
        let body = &tag[tag.find('>').unwrap() + 1..tag.find("</text>").unwrap()];
        (size, body.trim().to_string())
    }

    /// A title too long for the narrow (phone) drawing is drawn smaller so that it fits inside
    /// the drawing: "Mean weight change by week (those still weighing in)" at 380 px ran off both
    /// ends. A short title keeps the full size.
    #[test]
    fn a_long_title_fits_the_narrow_drawing() {
        let Chart::Line(mut c) = sample_line() else {
            unreachable!()
        };
        c.title = "Mean weight change by week (those still weighing in)".into();
        let long = Chart::Line(c.clone());
        for (width, svg) in [
            (380, to_svg_narrow(&long, 380, 260)),
            (720, to_svg(&long, 720, 300)),
        ] {
            let (size, text) = drawn_title(&svg);
            assert_eq!(text, c.title);
            let w = font::text_width(Face::Bold, &text, size);
            assert!(
                w <= width as f32 - 20.0,
                "{w} px title in a {width} px drawing"
            );
        }
        c.title = "Weight".into();
        let (size, _) = drawn_title(&to_svg_narrow(&Chart::Line(c), 380, 260));
        assert!(
            (size - TITLE_SIZE as f32 / SVG_FONT_DIVISOR).abs() < 1e-3,
            "{size}"
        );
    }
}

//! Reports: the report model (what templates see), HTML through handlebars templates, and the
//! PDF laid out from that same HTML ([`from_html`]) through [`crate::render::pdf`]. Everything
//! here returns bytes; the run writes them through [`crate::output`]. Reports see a [`Scope`],
//! never the run plan.
//!
//! One model feeds both formats: [`participant::ParticipantReportContext`] and
//! [`group::GroupReportContext`] hold every figure already formatted in the program's display
//! units, so an HTML report and its PDF never disagree.

pub mod cautions;
pub mod followup;
pub mod format;
pub mod from_html;
pub mod group;
pub mod guidance;
pub mod participant;
pub mod templates;

use crate::diag::Diagnostic;
use crate::group::GroupReport;
use crate::modules::ModuleResults;
use crate::modules::ModuleSet;
use crate::program::Format;
use crate::program::Program;
use crate::render::chart::{self, Chart};
use chrono::NaiveDate;
use cohortpress_metric_api::{ParticipantData, Period};
use serde::Serialize;
use std::collections::BTreeMap;
use templates::TemplateSet;

pub use group::GroupReportContext;
pub use participant::{ParticipantReport, ParticipantReportContext};

/// A label and a value, both display text.
#[derive(Debug, Clone, Serialize, PartialEq)]
pub struct Kv {
    /// Label.
    pub label: String,
    /// Value.
    pub value: String,
}

impl Kv {
    /// A new pair.
    pub fn new(label: &str, value: &str) -> Self {
        Kv {
            label: label.into(),
            value: value.into(),
        }
    }
}

/// A table of display text.
#[derive(Debug, Clone, Serialize, Default, PartialEq)]
pub struct TableView {
    /// Column headings.
    pub header: Vec<String>,
    /// Rows.
    pub rows: Vec<Vec<String>>,
}

/// A chart's title, text alternative and data table (the drawing itself is added per format).
#[derive(Debug, Clone, Serialize)]
pub struct ChartView {
    /// Title.
    pub title: String,
    /// Text alternative.
    pub alt: String,
    /// The data behind the chart.
    pub table: TableView,
}

/// What a report covers: the program (units, dates, sponsor, guidance and follow-up settings),
/// its modules (the follow-up list compares with the previous period), the reporting period and
/// the as-of day. Reports see this, never the run plan.
#[derive(Debug, Clone, Copy)]
pub struct Scope<'a> {
    /// The checked program.
    pub program: &'a Program,
    /// Its modules, settings resolved.
    pub modules: &'a ModuleSet,
    /// The reporting period.
    pub period: Period,
    /// The day treated as today.
    pub as_of: NaiveDate,
}

/// A period in words, as every report names it: `September 2026` for one whole month, else
/// `1 Sep 2026 – 15 Sep 2026` (also for several whole months: `--from 2026-03-01 --to
/// 2026-10-31` was labelled `March 2026` on every page, the habits figures included).
pub fn period_label(from: NaiveDate, to: NaiveDate) -> String {
    if is_one_whole_month(from, to) {
        format::month(from)
    } else {
        format!("{} – {}", format::date(from), format::date(to))
    }
}

/// Whether `from`–`to` is exactly one calendar month (its first to its last day).
pub fn is_one_whole_month(from: NaiveDate, to: NaiveDate) -> bool {
    use chrono::Datelike;
    from.day() == 1
        && to.succ_opt().is_some_and(|n| n.day() == 1)
        && (from.year(), from.month()) == (to.year(), to.month())
}

/// Program and period, as shown on every report.
#[derive(Debug, Clone, Serialize)]
pub struct ProgramView {
    /// Program id.
    pub id: String,
    /// Title.
    pub title: String,
    /// Sponsor, when given.
    pub sponsor: String,
    /// `September 2026` or `1 Apr 2026 – 30 Sep 2026`.
    pub period_label: String,
    /// First day of the period, ISO.
    pub period_from: String,
    /// Last day of the period, ISO.
    pub period_to: String,
    /// As-of date, formatted.
    pub as_of: String,
    /// Program dates, formatted.
    pub program_dates: String,
    /// `metric` or `us_customary`.
    pub units: String,
    /// Tool name and version.
    pub tool: String,
}

impl ProgramView {
    /// From the report's scope.
    pub fn new(plan: &Scope<'_>) -> Self {
        let info = &plan.program.info;
        let p = plan.period;
        let period_label = period_label(p.from, p.to);
        ProgramView {
            id: info.id.clone(),
            title: info.title.clone(),
            sponsor: plan.program.def.program.sponsor.clone().unwrap_or_default(),
            period_label,
            period_from: p.from.to_string(),
            period_to: p.to.to_string(),
            as_of: format::date(plan.as_of),
            program_dates: format!("{} – {}", format::date(info.start), format::date(info.end)),
            units: match info.units {
                cohortpress_metric_api::UnitSystem::Metric => "metric".into(),
                cohortpress_metric_api::UnitSystem::UsCustomary => "us_customary".into(),
            },
            tool: format!("cohortpress {}", env!("CARGO_PKG_VERSION")),
        }
    }
}

/// Builds the participant report model.
pub fn participant_context(
    plan: &Scope<'_>,
    data: &ParticipantData,
    results: &ModuleResults,
    diags: &[Diagnostic],
) -> ParticipantReport {
    participant::build(plan, data, results, diags)
}

/// Builds the group report model.
pub fn group_context(
    plan: &Scope<'_>,
    group: &GroupReport,
    left_out: usize,
) -> group::GroupReportModel {
    group::build(plan, group, left_out)
}

/// Why rendering failed.
#[derive(Debug, thiserror::Error)]
pub enum RenderError {
    /// A template error (names the template and line).
    #[error("template: {0}")]
    Template(String),
    /// A PDF error.
    #[error("pdf: {0}")]
    Pdf(String),
    /// Serialising the context.
    #[error("context: {0}")]
    Json(#[from] serde_json::Error),
}

/// Chart sizes, in SVG pixels: width and plot height (a line chart adds its legend strip below).
const CHART_W: u32 = 720;
const CHART_H: u32 = 300;

/// Narrow chart for phone screens: width and plot height in SVG pixels (the legend goes below).
const NARROW_W: u32 = 380;
const NARROW_PLOT_H: u32 = 300;

/// A chart as the HTML shows it, and the same markup with the drawing left out.
struct ChartMarkup {
    /// The wrapper with both SVG drawings, as the template's `{{chart}}` helper prints it.
    full: String,
    /// The same wrapper whose `<svg>` elements keep their opening tag and `<title>` but no
    /// drawing: what the PDF's reading of the HTML needs ([`pdf_source`]).
    shell: String,
}

/// Each chart drawn twice: wide and narrow (legend below the plot in both); the shared style
/// shows one of them by screen width, so a phone never scrolls sideways. The wrapper's
/// `data-chart` names the chart for the PDF, which draws it natively from the same description.
fn svg(name: &str, c: &Chart) -> ChartMarkup {
    let mut esc = String::new();
    handlebars::html_escape(name).clone_into(&mut esc);
    let wide = chart::to_svg(c, CHART_W, CHART_H);
    let narrow = chart::to_svg_narrow(c, NARROW_W, NARROW_PLOT_H);
    let wrap = |wide: &str, narrow: &str| {
        // The charts' labels (site and group names among them) are text from inputs too: the
        // SVG holds no invisible direction or control character (`render::neutralise`),
        // whatever plotters' own escaping keeps.
        let html = format!(
            "<div class=\"chart\" data-chart=\"{esc}\"><div class=\"chart-wide\">{wide}</div><div class=\"chart-narrow\">{narrow}</div></div>"
        );
        crate::render::neutralise(&html).into_owned()
    };
    ChartMarkup {
        full: wrap(&wide, &narrow),
        shell: wrap(svg_shell(&wide).as_ref(), svg_shell(&narrow).as_ref()),
    }
}

/// An `<svg>` drawing without its drawn content: the opening tag and the `<title>` (the text
/// alternative) are kept, everything after the title up to the closing tag is left out.
/// Reading a report's HTML for the PDF never looks inside a chart's `<svg>` (the chart is drawn
/// natively from its description, see [`from_html`]), except for the first `<title>` of a page
/// without one in its head, which stays; parsing some 100 KB of SVG per report for nothing was
/// the largest part of that reading.
fn svg_shell(svg: &str) -> std::borrow::Cow<'_, str> {
    const TITLE_END: &str = "</title>";
    match (svg.find(TITLE_END), svg.rfind("</svg>")) {
        (Some(t), Some(close)) if svg.starts_with("<svg") && t + TITLE_END.len() <= close => {
            let keep = t + TITLE_END.len();
            format!("{}{}", &svg[..keep], &svg[close..]).into()
        }
        _ => svg.into(),
    }
}

/// The charts drawn, by name.
fn draw_all(charts: &BTreeMap<String, Chart>) -> BTreeMap<&str, ChartMarkup> {
    charts
        .iter()
        .map(|(name, c)| (name.as_str(), svg(name, c)))
        .collect()
}

/// The drawn charts by name, as SVG for the template's `{{chart}}` helper.
fn svg_map(drawn: &BTreeMap<&str, ChartMarkup>) -> serde_json::Map<String, serde_json::Value> {
    drawn
        .iter()
        .map(|(name, m)| ((*name).to_string(), m.full.clone().into()))
        .collect()
}

/// The HTML the PDF is laid out from: the page as the template printed it, with every chart's
/// drawing replaced by its shell ([`svg_shell`]). The PDF is the same either way: a chart's
/// wrapper names the chart by `data-chart` and the PDF draws it from its description.
fn pdf_source(html: &str, drawn: &BTreeMap<&str, ChartMarkup>) -> String {
    let mut out = html.to_string();
    for m in drawn.values() {
        if m.full != m.shell {
            out = replace_all(&out, &m.full, &m.shell);
        }
    }
    out
}

/// `hay` with every occurrence of `from` replaced by `to`, left to right as [`str::replace`]
/// does. A chart's markup is tens of KB, and `str::replace` with a needle that long cost more
/// than the parsing it saves; here only the needle's first few bytes are searched for and a
/// candidate is then compared whole.
fn replace_all(hay: &str, from: &str, to: &str) -> String {
    let head_len = (0..=from.len().min(64))
        .rev()
        .find(|&i| from.is_char_boundary(i))
        .unwrap_or(0);
    let head = &from[..head_len];
    if head.is_empty() {
        return hay.replace(from, to);
    }
    let mut out = String::with_capacity(hay.len());
    let (mut copied, mut at) = (0, 0);
    while let Some(i) = hay[at..].find(head) {
        let start = at + i;
        if hay[start..].starts_with(from) {
            out.push_str(&hay[copied..start]);
            out.push_str(to);
            copied = start + from.len();
            at = copied;
        } else {
            // The next possible start: one character on.
            at = start + hay[start..].chars().next().map_or(1, char::len_utf8);
        }
    }
    out.push_str(&hay[copied..]);
    out
}

/// The characters of the participant's name the PDF's embedded font cannot show, when there are
/// any: the PDF then names them by their id ([`render_participant`]), and the run warns.
pub fn pdf_name_fallback(report: &ParticipantReport) -> Option<Vec<char>> {
    let missing = crate::render::pdf_unshowable(&report.ctx.participant.display_name);
    (!missing.is_empty()).then_some(missing)
}

/// The characters the PDF's embedded font cannot show in the rest of the participant's report
/// (a site, team or activity name, a note from an external module …): they print as empty
/// boxes in the PDF, and the run warns. The name is left out (see [`pdf_name_fallback`]).
pub fn pdf_unshowable_text(report: &ParticipantReport) -> Vec<char> {
    let mut ctx = report.ctx.clone();
    ctx.participant.display_name.clear();
    // Every text the template can print is a string of the context; its keys are ASCII.
    serde_json::to_string(&ctx).map_or_else(|_| Vec::new(), |j| crate::render::pdf_unshowable(&j))
}

/// With templates of the program's own, a page must show each of `cautions` (the built-in
/// templates always print them with `{{> cautions}}`): in text a reader sees both on screen and
/// in the PDF ([`from_html::shown_text`]). A participant report without "not medical advice" and
/// "your own licensed clinician come first" is not published: the run stops, naming the template
/// and the first caution missing.
fn check_cautions(
    templates: &TemplateSet,
    name: &str,
    html: &str,
    cautions: &[String],
) -> Result<(), RenderError> {
    if !templates.is_overridden() {
        return Ok(());
    }
    let shown = from_html::shown_text(html);
    let missing = cautions.iter().find(|c| {
        let want = crate::render::neutralise(c);
        !shown.contains(&want.split_whitespace().collect::<Vec<_>>().join(" "))
    });
    match missing {
        None => Ok(()),
        Some(c) => Err(RenderError::Template(format!(
            "the page made from {} does not show the cautions every report of this kind \
             carries, on screen and in the PDF alike; missing: \"{c}\" (print them with \
             {{{{> cautions}}}}, outside comments and outside anything hidden or shown in one \
             medium only); nothing was published",
            templates.source_of(name)
        ))),
    }
}

/// A participant report's charts by the name templates print them with (`{{chart "weight"}}`).
fn participant_charts(report: &ParticipantReport) -> BTreeMap<String, Chart> {
    let mut charts = BTreeMap::new();
    charts.insert("weight".to_string(), report.weight_chart.clone());
    if let Some(c) = &report.energy_chart {
        charts.insert("energy".into(), c.clone());
    }
    if let Some(c) = &report.activity_chart {
        charts.insert("activity".into(), c.clone());
    }
    charts
}

/// A page of the program's own templates that cannot be made or does not show the cautions,
/// found by [`check_template_cautions`], with the error a run stops on for it.
#[derive(Debug)]
pub enum CautionsMissing {
    /// The participant page.
    Participant(RenderError),
    /// The de-identified group report's page.
    Group(RenderError),
}

/// For `check`: whether the pages the program's own templates make — the participant page
/// and the group report's page — can be made and show the cautions, judged by the check a run
/// makes before it publishes ([`check_cautions`], the same words). The participant page is
/// made for `data` as a run makes it: from the module results computed for that participant in
/// the plan's period, with the cautions the program's settings give, which are the run's; a
/// page that cannot be made (a misspelt field, a partial that does not exist, what a browser
/// would parse as a script) is the error the run stops on for that participant. Without a usable
/// participant it is not judged. The group page is made from a group report of nobody (its
/// cautions rest only on the program's `privacy.min_cell_size`, not on its figures); a field
/// that report lacks is left to the run, which has the figures, but any other failure (a
/// partial that does not exist) is the run's. `Ok` with the built-in templates.
pub fn check_template_cautions(
    templates: &TemplateSet,
    plan: &Scope<'_>,
    data: Option<&ParticipantData>,
) -> Result<(), CautionsMissing> {
    if !templates.is_overridden() {
        return Ok(());
    }
    if let Some(data) = data {
        // The page the run makes for this participant. Made without the module results, a
        // page that needs them could not be made, so any failure was passed over, and with it
        // a misspelt field or a missing partial: `check` said "ok" and the run stopped on the
        // first participant with exit code 6.
        let results = plan
            .modules
            .run(&plan.program.info, plan.period, plan.as_of, data);
        let report = participant::build(plan, data, &results, &[]);
        let charts = participant_charts(&report);
        let drawn = draw_all(&charts);
        let html = templates
            .render("participant.html", &report.ctx, svg_map(&drawn))
            .map_err(CautionsMissing::Participant)?;
        check_cautions(templates, "participant.html", &html, &report.ctx.cautions)
            .map_err(CautionsMissing::Participant)?;
    }
    let opts = crate::group::GroupOptions {
        min_cell_size: plan.program.def.privacy.min_cell_size,
        group_by: plan.program.def.report.group_by.clone(),
        ..Default::default()
    };
    let model = group::build(plan, &crate::group::summarize(&[], &opts), 0);
    let charts: BTreeMap<String, Chart> = model.charts.iter().cloned().collect();
    let drawn = draw_all(&charts);
    match templates.render("group.html", &model.ctx, svg_map(&drawn)) {
        Ok(html) => check_cautions(templates, "group.html", &html, &model.ctx.cautions)
            .map_err(CautionsMissing::Group)?,
        Err(RenderError::Template(m)) if m.contains("Failed to access variable") => {}
        Err(e) => return Err(CautionsMissing::Group(e)),
    }
    Ok(())
}

/// Renders one participant's report in the requested formats: (`html` | `pdf`, bytes). The PDF
/// is laid out from the HTML, so both always say the same.
pub fn render_participant(
    templates: &TemplateSet,
    report: &ParticipantReport,
    formats: &[Format],
) -> Result<Vec<(&'static str, Vec<u8>)>, RenderError> {
    let charts = participant_charts(report);
    let drawn = draw_all(&charts);
    let svgs = svg_map(&drawn);
    let c = &report.ctx;
    // A name the PDF's font cannot show (most CJK, Thai …) would print as empty boxes, or
    // nothing a reader can copy: the PDF names the participant by their id instead (no
    // transliteration: a guessed spelling of someone's name is worse than none). The HTML,
    // which the reader's own fonts show, keeps the name; the run log says so
    // (`pdf_name_fallback`). Only then is the page rendered twice (and the charts' SVG map
    // copied); otherwise the PDF is laid out from the HTML page itself.
    let name_fallback = formats.contains(&Format::Pdf) && pdf_name_fallback(report).is_some();
    let (html, pdf_html) = if name_fallback {
        let html = templates.render("participant.html", c, svgs.clone())?;
        let mut ctx = c.clone();
        ctx.participant.display_name = format!("Participant {}", c.participant.id);
        let pdf_html = templates.render("participant.html", &ctx, svgs)?;
        (html, Some(pdf_html))
    } else {
        (templates.render("participant.html", c, svgs)?, None)
    };
    for page in std::iter::once(&html).chain(pdf_html.as_ref()) {
        check_cautions(templates, "participant.html", page, &c.cautions)?;
    }
    let pdf_html = if formats.contains(&Format::Pdf) {
        pdf_source(pdf_html.as_deref().unwrap_or(&html), &drawn)
    } else {
        String::new()
    };
    let mut out = Vec::new();
    for f in formats {
        match f {
            Format::Html => out.push(("html", html.clone().into_bytes())),
            Format::Pdf => out.push((
                "pdf",
                from_html::pdf(
                    &pdf_html,
                    &templates.source_of("participant.html"),
                    &charts,
                    from_html::Frame {
                        header: format!("{} · {}", c.program.title, c.program.period_label),
                        footer: format!("Private · participant {}", c.participant.id),
                        subject: format!("Private progress report, {}", c.program.title),
                        author: c.program.tool.clone(),
                        period_to: c.program.period_to.clone(),
                        id_seed: format!(
                            "{}/{}/{}",
                            c.program.id, c.program.period_to, c.participant.id
                        ),
                    },
                )?,
            )),
        }
    }
    Ok(out)
}

/// Renders the group report: (`program.html` | `program.pdf`, bytes).
pub fn render_group(
    templates: &TemplateSet,
    report: &group::GroupReportModel,
    formats: &[Format],
) -> Result<Vec<(String, Vec<u8>)>, RenderError> {
    let charts: BTreeMap<String, Chart> = report.charts.iter().cloned().collect();
    let drawn = draw_all(&charts);
    let html = templates.render("group.html", &report.ctx, svg_map(&drawn))?;
    let c = &report.ctx;
    check_cautions(templates, "group.html", &html, &c.cautions)?;
    let mut out = Vec::new();
    for f in formats {
        match f {
            Format::Html => out.push(("program.html".to_string(), html.clone().into_bytes())),
            Format::Pdf => out.push((
                "program.pdf".to_string(),
                from_html::pdf(
                    &pdf_source(&html, &drawn),
                    &templates.source_of("group.html"),
                    &charts,
                    from_html::Frame {
                        header: format!("{} · {}", c.program.title, c.program.period_label),
                        footer: "De-identified group report".into(),
                        subject: format!("De-identified group report, {}", c.program.title),
                        author: c.program.tool.clone(),
                        period_to: c.program.period_to.clone(),
                        id_seed: format!("{}/{}/group", c.program.id, c.program.period_to),
                    },
                )?,
            )),
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::render::chart::tests::sample_line;

    fn frame() -> from_html::Frame {
        from_html::Frame {
            header: "Program · September 2026".into(),
            footer: "Private · participant P-1".into(),
            subject: "Private progress report".into(),
            author: "cohortpress".into(),
            period_to: "2026-09-30".into(),
            id_seed: "prog/2026-09-30/P-1".into(),
        }
    }

    #[test]
    fn a_charts_shell_keeps_the_svg_opening_tag_and_title_and_drops_the_drawing() {
        let m = svg("weight", &sample_line());
        let wide = chart::to_svg(&sample_line(), CHART_W, CHART_H);
        let title_end = wide.find("</title>").unwrap() + "</title>".len();
        // The wide drawing's shell: its opening tag and title, then the closing tag.
        let expected_wide = format!("{}</svg>\n", &wide[..title_end]);
        assert!(wide.ends_with("</svg>\n"));
        assert!(
            m.shell.starts_with(&format!(
                "<div class=\"chart\" data-chart=\"weight\"><div class=\"chart-wide\">{expected_wide}</div><div class=\"chart-narrow\"><svg width=\"380\""
            )),
            "{}",
            m.shell
        );
        assert!(m.full.contains(&wide));
        for drawn in ["<polyline", "<circle", "<rect", "<text"] {
            assert!(m.full.contains(drawn), "{drawn}");
            assert!(!m.shell.contains(drawn), "{drawn} in {}", m.shell);
        }
        assert_eq!(m.shell.matches("<title>").count(), 2);
        assert_eq!(m.shell.matches("</svg>").count(), 2);
        // Not an SVG drawing (no title): left as it is.
        assert_eq!(svg_shell("<svg></svg>"), "<svg></svg>");
        assert_eq!(svg_shell("<p>x</title></p>"), "<p>x</title></p>");
    }

    #[test]
    fn a_period_is_named_as_a_month_only_when_it_is_one_whole_month() {
        let d = |s: &str| s.parse::<NaiveDate>().unwrap();
        assert_eq!(
            period_label(d("2026-09-01"), d("2026-09-30")),
            "September 2026"
        );
        assert_eq!(
            period_label(d("2024-02-01"), d("2024-02-29")),
            "February 2024"
        );
        // Several whole months: every page and the habits figures said "March 2026".
        assert_eq!(
            period_label(d("2026-03-01"), d("2026-10-31")),
            "1 Mar 2026 – 31 Oct 2026"
        );
        // Three years, and a span of 13 months that starts and ends in January.
        assert_eq!(
            period_label(d("2026-01-01"), d("2028-12-31")),
            "1 Jan 2026 – 31 Dec 2028"
        );
        assert_eq!(
            period_label(d("2026-01-01"), d("2027-01-31")),
            "1 Jan 2026 – 31 Jan 2027"
        );
        assert_eq!(
            period_label(d("2026-09-02"), d("2026-09-30")),
            "2 Sep 2026 – 30 Sep 2026"
        );
    }

    #[test]
    fn replace_all_replaces_like_str_replace() {
        for (hay, from, to) in [
            ("aXbXc", "X", "yy"),
            ("XXX", "XX", "-"),
            ("ab", "abc", "-"),
            ("", "a", "b"),
            ("é<div>é<div>é", "<div>é", "<p>"),
            ("abcabd abcabc", "abcabc", "Z"),
        ] {
            assert_eq!(replace_all(hay, from, to), hay.replace(from, to), "{hay}");
        }
        // A needle longer than the searched head, with a near miss before the match.
        let from = format!("<div>{}</div>", "x".repeat(100));
        let near = format!("<div>{}y</div>", "x".repeat(99));
        let hay = format!("{near}{from}-{from}");
        assert_eq!(replace_all(&hay, &from, "C"), format!("{near}C-C"));
    }

    #[test]
    fn the_pdf_laid_out_from_the_shells_is_the_pdf_laid_out_from_the_drawings() {
        let mut charts = BTreeMap::new();
        charts.insert("weight".to_string(), sample_line());
        let drawn = draw_all(&charts);
        let full = &drawn["weight"].full;
        for page in [
            // The usual page: a title in the head, the chart in a figure.
            format!(
                "<html lang=\"en\"><head><title>Report</title></head><body><h1>Weight</h1>\
                 <figure>{full}<figcaption>Falling.</figcaption></figure><p>After.</p>\
                 {full}</body></html>"
            ),
            // No title in the head: the first <title> of the page is the chart's own.
            format!("<html><body><p>Before.</p>{full}<p>After.</p></body></html>"),
        ] {
            let shells = pdf_source(&page, &drawn);
            assert!(
                shells.len() * 5 < page.len(),
                "{} of {}",
                shells.len(),
                page.len()
            );
            let a = from_html::pdf(&page, "t.hbs", &charts, frame()).unwrap();
            let b = from_html::pdf(&shells, "t.hbs", &charts, frame()).unwrap();
            assert!(
                a == b,
                "the PDFs differ ({} and {} bytes)",
                a.len(),
                b.len()
            );
        }
        // A chart where the PDF only takes text fails the same way, naming the same element.
        let page = format!("<html><body><ul><li>{full}</li></ul></body></html>");
        let a = from_html::pdf(&page, "t.hbs", &charts, frame()).unwrap_err();
        let b = from_html::pdf(&pdf_source(&page, &drawn), "t.hbs", &charts, frame()).unwrap_err();
        assert_eq!(a.to_string(), b.to_string());
        // The element named keeps its attributes: the chart's text alternative among them.
        assert!(
            a.to_string()
                .contains("<svg aria-label=\"Weight fell from 92"),
            "{a}"
        );
    }
}

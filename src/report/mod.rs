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

/// A period in words, as every report names it: `September 2026` for a whole month, else
/// `1 Sep 2026 – 15 Sep 2026`.
pub fn period_label(from: NaiveDate, to: NaiveDate) -> String {
    let whole_month = from.format("%d").to_string() == "01"
        && to
            .succ_opt()
            .is_some_and(|n| n.format("%d").to_string() == "01");
    if whole_month {
        format::month(from)
    } else {
        format!("{} – {}", format::date(from), format::date(to))
    }
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

/// Each chart drawn twice: wide and narrow (legend below the plot in both); the shared style
/// shows one of them by screen width, so a phone never scrolls sideways. The wrapper's
/// `data-chart` names the chart for the PDF, which draws it natively from the same description.
fn svg(name: &str, c: &Chart) -> String {
    let mut esc = String::new();
    handlebars::html_escape(name).clone_into(&mut esc);
    // The charts' labels (site and group names among them) are text from inputs too: the SVG
    // holds no invisible direction or control character (`render::neutralise`), whatever
    // plotters' own escaping keeps.
    let html = format!(
        "<div class=\"chart\" data-chart=\"{esc}\"><div class=\"chart-wide\">{}</div><div class=\"chart-narrow\">{}</div></div>",
        chart::to_svg(c, CHART_W, CHART_H),
        chart::to_svg_narrow(c, NARROW_W, NARROW_PLOT_H)
    );
    crate::render::neutralise(&html).into_owned()
}

/// The drawn charts by name, as SVG for the template's `{{chart}}` helper.
fn svg_map(charts: &BTreeMap<String, Chart>) -> serde_json::Map<String, serde_json::Value> {
    charts
        .iter()
        .map(|(name, c)| (name.clone(), svg(name, c).into()))
        .collect()
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

/// Renders one participant's report in the requested formats: (`html` | `pdf`, bytes). The PDF
/// is laid out from the HTML, so both always say the same.
pub fn render_participant(
    templates: &TemplateSet,
    report: &ParticipantReport,
    formats: &[Format],
) -> Result<Vec<(&'static str, Vec<u8>)>, RenderError> {
    let mut charts = BTreeMap::new();
    charts.insert("weight".to_string(), report.weight_chart.clone());
    if let Some(c) = &report.energy_chart {
        charts.insert("energy".into(), c.clone());
    }
    if let Some(c) = &report.activity_chart {
        charts.insert("activity".into(), c.clone());
    }
    let svgs = svg_map(&charts);
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
    let pdf_html = pdf_html.as_deref().unwrap_or(&html);
    let mut out = Vec::new();
    for f in formats {
        match f {
            Format::Html => out.push(("html", html.clone().into_bytes())),
            Format::Pdf => out.push((
                "pdf",
                from_html::pdf(
                    pdf_html,
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
    let html = templates.render("group.html", &report.ctx, svg_map(&charts))?;
    let c = &report.ctx;
    let mut out = Vec::new();
    for f in formats {
        match f {
            Format::Html => out.push(("program.html".to_string(), html.clone().into_bytes())),
            Format::Pdf => out.push((
                "program.pdf".to_string(),
                from_html::pdf(
                    &html,
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

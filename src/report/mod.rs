//! Reports: the report model (what templates and the PDF layout see), HTML through handlebars
//! templates, and PDF through [`crate::render::pdf`]. Everything here returns bytes; only the
//! runner writes files.
//!
//! One model feeds both formats: [`participant::ParticipantReportContext`] and
//! [`group::GroupReportContext`] hold every figure already formatted in the program's display
//! units, so an HTML report and its PDF never disagree.

pub mod cautions;
pub mod followup;
pub mod format;
pub mod group;
pub mod guidance;
pub mod participant;
pub mod pdf;
pub mod templates;

use crate::diag::Diagnostic;
use crate::group::GroupReport;
use crate::modules::ModuleResults;
use crate::program::Format;
use crate::render::chart::{self, Chart};
use crate::run::execute::{RunPlan, RunSummary};
use cohortpress_metric_api::ParticipantData;
use serde::Serialize;
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
    /// From the run plan.
    pub fn new(plan: &RunPlan) -> Self {
        let info = &plan.program.info;
        let p = plan.period;
        let whole_month = p.from.format("%d").to_string() == "01"
            && p.to
                .succ_opt()
                .is_some_and(|n| n.format("%d").to_string() == "01");
        let period_label = if whole_month {
            format::month(p.from)
        } else {
            format!("{} – {}", format::date(p.from), format::date(p.to))
        };
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
    plan: &RunPlan,
    data: &ParticipantData,
    results: &ModuleResults,
    diags: &[Diagnostic],
) -> ParticipantReport {
    participant::build(plan, data, results, diags)
}

/// Builds the group report model.
pub fn group_context(
    plan: &RunPlan,
    group: &GroupReport,
    summary: &RunSummary,
) -> group::GroupReportModel {
    group::build(plan, group, summary)
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

/// Chart sizes, in SVG pixels.
const CHART_W: u32 = 720;
const CHART_H: u32 = 300;

/// Narrow chart for phone screens: width and plot height in SVG pixels (the legend goes below).
const NARROW_W: u32 = 380;
const NARROW_PLOT_H: u32 = 300;

/// Each chart drawn twice: wide (legend in the emptiest plot corner) and narrow (legend below the
/// plot); the shared style shows one of them by screen width, so a phone never scrolls sideways.
fn svg(c: &Chart) -> String {
    format!(
        "<div class=\"chart-wide\">{}</div><div class=\"chart-narrow\">{}</div>",
        chart::to_svg(c, CHART_W, CHART_H),
        chart::to_svg_narrow(c, NARROW_W, NARROW_PLOT_H)
    )
}

/// Renders one participant's report in the requested formats: (`html` | `pdf`, bytes).
pub fn render_participant(
    templates: &TemplateSet,
    report: &ParticipantReport,
    formats: &[Format],
) -> Result<Vec<(&'static str, Vec<u8>)>, RenderError> {
    let mut out = Vec::new();
    for f in formats {
        match f {
            Format::Html => {
                let mut charts = serde_json::Map::new();
                charts.insert("weight".into(), svg(&report.weight_chart).into());
                if let Some(c) = &report.energy_chart {
                    charts.insert("energy".into(), svg(c).into());
                }
                if let Some(c) = &report.activity_chart {
                    charts.insert("activity".into(), svg(c).into());
                }
                let html = templates.render("participant.html", &report.ctx, charts)?;
                out.push(("html", html.into_bytes()));
            }
            Format::Pdf => out.push(("pdf", pdf::participant(report)?)),
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
    let mut out = Vec::new();
    for f in formats {
        match f {
            Format::Html => {
                let mut charts = serde_json::Map::new();
                for (name, c) in &report.charts {
                    charts.insert(name.clone(), svg(c).into());
                }
                let html = templates.render("group.html", &report.ctx, charts)?;
                out.push(("program.html".to_string(), html.into_bytes()));
            }
            Format::Pdf => out.push(("program.pdf".to_string(), pdf::group(report)?)),
        }
    }
    Ok(out)
}

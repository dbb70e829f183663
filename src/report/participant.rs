//! The participant report model: everything the participant templates and the PDF layout show,
//! built once from the module outputs so both formats print the same figures.

use super::format as fmt;
use super::guidance::{self, GuidanceView};
use super::{ChartView, Kv, TableView, cautions};
use crate::diag::{Diagnostic, Severity};
use crate::modules::ModuleResults;
use crate::render::chart::{
    BandSeries, Bar, BarChart, Chart, HLine, LineChart, LineSeries, LineStyle, Span, SpanKind,
};
use crate::run::execute::RunPlan;
use chrono::NaiveDate;
use cohortpress_metric_api::{
    Cell, FlagSeverity, ModuleOutput, ParticipantData, Table, UnitSystem,
};
use serde::Serialize;

/// What the participant templates see (documented field by field in
/// `report-templates/CONTEXT.md`).
#[derive(Debug, Clone, Serialize)]
pub struct ParticipantReportContext {
    /// Program and period.
    pub program: super::ProgramView,
    /// Who the report is for.
    pub participant: PersonView,
    /// One-line status in plain words.
    pub headline: String,
    /// Key figures (label, value).
    pub summary: Vec<Kv>,
    /// Milestones (3, 5, 7, 10 %).
    pub milestones: Vec<MilestoneView>,
    /// Weight chart (title, alt text, data table; the SVG is added at render time).
    pub weight_chart: ChartView,
    /// Energy balance section, when the energy module ran.
    pub energy: Option<EnergyView>,
    /// Adherence section, when the adherence module ran.
    pub adherence: Option<AdherenceView>,
    /// Plateau assessments, when a plateau was found.
    pub plateaus: Vec<PlateauView>,
    /// "What to try next": the guidance the decision table chose (see [`super::guidance`]).
    pub guidance: GuidanceView,
    /// Lab values with categories.
    pub labs: Option<TableView>,
    /// Flags raised by the modules (clinical ones first).
    pub flags: Vec<FlagView>,
    /// Data problems found in this participant's files.
    pub data_notes: Vec<String>,
    /// Modules that failed for this participant.
    pub module_failures: Vec<String>,
    /// Values from other (external) modules.
    pub extra: Vec<ExtraView>,
    /// The cautions printed on every participant report.
    pub cautions: Vec<String>,
}

/// The participant.
#[derive(Debug, Clone, Serialize)]
pub struct PersonView {
    /// Participant id.
    pub id: String,
    /// Name if given, else the id.
    pub display_name: String,
    /// Facts about the participant (label, value).
    pub facts: Vec<Kv>,
}

/// One milestone.
#[derive(Debug, Clone, Serialize)]
pub struct MilestoneView {
    /// `5 % loss`.
    pub label: String,
    /// Reached?
    pub reached: bool,
    /// When, if reached.
    pub reached_on: String,
}

/// Energy-balance section.
#[derive(Debug, Clone, Serialize)]
pub struct EnergyView {
    /// Key figures.
    pub items: Vec<Kv>,
    /// Short explanation of what the figures mean.
    pub explanation: String,
    /// Weekly table and chart.
    pub chart: ChartView,
}

/// Adherence section.
#[derive(Debug, Clone, Serialize)]
pub struct AdherenceView {
    /// Key figures.
    pub items: Vec<Kv>,
    /// Weekly activity chart with its data table (all weekly columns).
    pub chart: ChartView,
}

/// One plateau and what it most likely is.
#[derive(Debug, Clone, Serialize)]
pub struct PlateauView {
    /// `12 Jul 2026 – 20 Aug 2026`.
    pub period: String,
    /// Plain-words classification.
    pub verdict: String,
    /// The numbers behind it.
    pub evidence: String,
}

/// A flag shown to the participant.
#[derive(Debug, Clone, Serialize)]
pub struct FlagView {
    /// `clinical`, `notice` or `info`.
    pub severity: String,
    /// For review by a licensed clinician?
    pub clinical: bool,
    /// The message.
    pub message: String,
}

/// Values of another module.
#[derive(Debug, Clone, Serialize)]
pub struct ExtraView {
    /// Module id.
    pub module: String,
    /// Its scalars and texts.
    pub items: Vec<Kv>,
}

/// The participant model plus its charts (charts are drawn per format at render time).
pub struct ParticipantReport {
    /// The template context.
    pub ctx: ParticipantReportContext,
    /// Weight chart.
    pub weight_chart: Chart,
    /// Weekly energy chart, when present.
    pub energy_chart: Option<Chart>,
    /// Weekly activity chart, when present.
    pub activity_chart: Option<Chart>,
}

fn cell_text(c: &Cell) -> String {
    match c {
        Cell::Number(n) => fmt::fixed(*n, if n.fract() == 0.0 { 0 } else { 1 }),
        Cell::Text(t) => t.clone(),
        Cell::Empty => String::new(),
    }
}

fn col(t: &Table, name: &str) -> Option<usize> {
    t.columns.iter().position(|c| c.name == name)
}

fn cell<'a>(t: &'a Table, row: &'a [Cell], name: &str) -> Option<&'a Cell> {
    col(t, name).and_then(|i| row.get(i))
}

fn cell_num(t: &Table, row: &[Cell], name: &str) -> Option<f64> {
    match cell(t, row, name)? {
        Cell::Number(n) => Some(*n),
        _ => None,
    }
}

fn cell_str(t: &Table, row: &[Cell], name: &str) -> String {
    cell(t, row, name).map(cell_text).unwrap_or_default()
}

fn cell_date(t: &Table, row: &[Cell], name: &str) -> Option<NaiveDate> {
    match cell(t, row, name)? {
        Cell::Text(s) => NaiveDate::parse_from_str(s, "%Y-%m-%d").ok(),
        _ => None,
    }
}

/// Builds the participant report.
pub fn build(
    plan: &RunPlan,
    data: &ParticipantData,
    results: &ModuleResults,
    diags: &[Diagnostic],
) -> ParticipantReport {
    let units = plan.program.info.units;
    let p = &data.profile;
    let trend = results.output("trend");
    let energy = results.output("energy");
    let adherence = results.output("adherence");
    let outcomes = results.output("outcomes");

    let mut facts = vec![Kv::new("Participant id", &p.id)];
    facts.push(Kv::new("Enrolled", &fmt::date(p.enrolled)));
    if let Some(w) = p.withdrew {
        facts.push(Kv::new("Left the program", &fmt::date(w)));
    }
    facts.push(Kv::new("Height", &fmt::height(p.height.cm(), units)));
    for (k, v) in &p.groups {
        facts.push(Kv::new(&fmt::capitalise(k), v));
    }

    // Summary figures.
    let mut summary = Vec::new();
    let sc = |o: Option<&ModuleOutput>, n: &str| o.and_then(|o| o.scalar(n));
    if let Some(w) = sc(trend, "current_weight_kg").or(sc(outcomes, "current_weight_kg")) {
        summary.push(Kv::new("Current weight (trend)", &fmt::weight(w, units)));
    }
    if let Some(b) = sc(outcomes, "baseline_weight_kg") {
        summary.push(Kv::new("Starting weight", &fmt::weight(b, units)));
    }
    if let (Some(c), Some(pc)) = (sc(outcomes, "change_kg"), sc(outcomes, "change_percent")) {
        summary.push(Kv::new(
            "Change since start",
            &format!(
                "{} ({})",
                fmt::weight_change(c, units),
                fmt::percent_change(pc)
            ),
        ));
    }
    if let Some(r) = sc(trend, "slope_kg_per_week") {
        summary.push(Kv::new(
            "Recent rate (last 4 weeks)",
            &fmt::rate_per_week(r, units),
        ));
    }
    if let Some(bmi) = sc(outcomes, "bmi_current_kg_m2") {
        let code = outcomes
            .and_then(|o| o.texts.iter().find(|t| t.name == "bmi_category_current"))
            .map(|t| t.value.as_str())
            .unwrap_or_default();
        summary.push(Kv::new(
            "BMI",
            &format!("{} kg/m²{}", fmt::fixed(bmi, 1), bmi_range_words(code)),
        ));
    }

    let left = p.withdrew.filter(|w| *w <= plan.period.to);
    let headline = headline(trend, outcomes, units, left);

    let milestones = outcomes
        .and_then(|o| o.table("milestones"))
        .map(|t| {
            t.rows
                .iter()
                .map(|r| MilestoneView {
                    label: format!("{} % loss", cell_str(t, r, "threshold_percent")),
                    reached: cell_str(t, r, "reached") == "yes",
                    reached_on: cell_date(t, r, "date_reached")
                        .map(fmt::date)
                        .unwrap_or_default(),
                })
                .collect()
        })
        .unwrap_or_default();

    // Weight chart.
    let target_kg = sc(outcomes, "baseline_weight_kg")
        .map(|b| b * (1.0 + p.targets.weight_change_percent / 100.0));
    let (weight_chart, weight_view) = weight_chart(trend, energy, target_kg, units, plan);

    // Energy.
    let (energy_view, energy_chart) = match energy {
        Some(e) => {
            let (v, c) = energy_section(e);
            (Some(v), c)
        }
        None => (None, None),
    };

    // Adherence.
    let (adherence_view, activity_chart) = match adherence {
        Some(a) => {
            let (v, c) = adherence_section(
                a,
                p.targets.activity_minutes_per_week,
                &activity_unread(diags),
            );
            (Some(v), Some(c))
        }
        None => (None, None),
    };

    // Plateaus and options.
    // Only plateaus that reach into the last four weeks before the period: older ones are
    // history (still shaded on the weight chart), not something to act on now.
    let recent = plan.period.from - chrono::Duration::days(28);
    let plateaus: Vec<PlateauView> = energy
        .and_then(|e| e.table("plateau_assessment"))
        .map(|t| {
            t.rows
                .iter()
                .filter(|r| cell_date(t, r, "end").is_none_or(|end| end >= recent))
                .map(|r| {
                    let period = match (cell_date(t, r, "start"), cell_date(t, r, "end")) {
                        (Some(a), Some(b)) => format!("{} – {}", fmt::date(a), fmt::date(b)),
                        _ => String::new(),
                    };
                    let verdict = match cell_str(t, r, "classification").as_str() {
                        "expected_slowdown" => "The slowdown expected at your new, lower weight: your body now uses less energy than when you started.".to_string(),
                        "intake_drift" => "Most likely a gradual rise in how much is eaten: the weight trend implies a higher intake than before the plateau.".to_string(),
                        _ => "The records do not yet show clearly whether this is the expected slowdown at a lower weight or a gradual rise in how much is eaten.".to_string(),
                    };
                    PlateauView { period, verdict, evidence: plateau_evidence(t, r, units) }
                })
                .collect()
        })
        .unwrap_or_default();
    let guidance = guidance::build(plan, data, results);
    // Plateau readings belong with advice to restart a loss; for anyone else (past the target,
    // regaining, withdrawn, for a clinician first) they would invite the wrong action.
    // Only the latest plateau: overlapping readings of one stall would say the same thing
    // several times.
    let plateaus = if guidance.show_plateaus {
        plateaus.into_iter().last().into_iter().collect()
    } else {
        Vec::new()
    };

    // Labs.
    let labs = outcomes
        .and_then(|o| o.table("labs"))
        .filter(|t| !t.rows.is_empty())
        .map(|t| TableView {
            header: vec![
                "Date".into(),
                "Test".into(),
                "Value".into(),
                "Also".into(),
                "Range".into(),
            ],
            rows: t
                .rows
                .iter()
                .map(|r| {
                    let v = format!("{} {}", cell_str(t, r, "value"), cell_str(t, r, "unit"));
                    let alt = format!(
                        "{} {}",
                        cell_str(t, r, "value_alt"),
                        cell_str(t, r, "unit_alt")
                    );
                    vec![
                        cell_date(t, r, "date").map(fmt::date).unwrap_or_default(),
                        lab_name(&cell_str(t, r, "test")),
                        v.trim().to_string(),
                        alt.trim().to_string(),
                        cell_str(t, r, "category").replace('_', " "),
                    ]
                })
                .collect(),
        });

    // Flags: clinical first, then notices, then information.
    let mut flags: Vec<FlagView> = results
        .outputs
        .iter()
        .flat_map(|(_, o)| o.flags.iter())
        .map(|f| FlagView {
            severity: match f.severity {
                FlagSeverity::Clinical => "clinical",
                FlagSeverity::Notice => "notice",
                FlagSeverity::Info => "info",
            }
            .into(),
            clinical: f.severity == FlagSeverity::Clinical,
            message: fmt::tidy_message(&f.message),
        })
        .collect();
    flags.sort_by_key(|f| match f.severity.as_str() {
        "clinical" => 0,
        "notice" => 1,
        _ => 2,
    });

    let data_notes = diags
        .iter()
        .map(|d| {
            let file = d.file.rsplit('/').next().unwrap_or(&d.file);
            let line = d.line.map(|l| format!(", line {l}")).unwrap_or_default();
            if d.severity == Severity::Error {
                // A whole file was left out: say what this report is missing.
                let missing = match file {
                    "weights.csv" => "weigh-ins",
                    "intake.csv" => "food log",
                    "activity.csv" => "activity log",
                    "sessions.csv" => "session attendance",
                    "labs.csv" => "lab results",
                    _ => "data",
                };
                format!(
                    "Not used — {file}{line}: {}. This report is without your {missing} from that file.",
                    d.message
                )
            } else {
                format!("Note — {file}{line}: {}", d.message)
            }
        })
        .collect();

    let module_failures = results
        .failures
        .iter()
        .map(|f| format!("{}: {}", f.module, f.message))
        .collect();

    let builtin = ["trend", "energy", "adherence", "outcomes"];
    let extra = results
        .outputs
        .iter()
        .filter(|(m, _)| !builtin.contains(&m.as_str()))
        .map(|(m, o)| ExtraView {
            module: m.clone(),
            items: o
                .scalars
                .iter()
                .map(|s| {
                    Kv::new(
                        &s.label,
                        &s.value
                            .map(|v| format!("{} {}", fmt::fixed(v, 1), s.unit))
                            .unwrap_or_else(|| "–".into()),
                    )
                })
                .chain(
                    o.texts
                        .iter()
                        .map(|t| Kv::new(&t.name.replace('_', " "), &t.label)),
                )
                .collect(),
        })
        .collect();

    let ctx = ParticipantReportContext {
        program: super::ProgramView::new(plan),
        participant: PersonView {
            id: p.id.clone(),
            display_name: p.name.clone().unwrap_or_else(|| p.id.clone()),
            facts,
        },
        headline,
        summary,
        milestones,
        weight_chart: weight_view,
        energy: energy_view,
        adherence: adherence_view,
        plateaus,
        guidance,
        labs,
        flags,
        data_notes,
        module_failures,
        extra,
        cautions: cautions::participant(&guidance::Thresholds::from_plan(plan)),
    };
    ParticipantReport {
        ctx,
        weight_chart,
        energy_chart,
        activity_chart,
    }
}

fn lab_name(code: &str) -> String {
    match code {
        "fasting_glucose" => "Fasting glucose".into(),
        "hba1c" => "HbA1c".into(),
        "waist" => "Waist".into(),
        "systolic_bp" => "Blood pressure (systolic)".into(),
        "diastolic_bp" => "Blood pressure (diastolic)".into(),
        other => other.replace('_', " "),
    }
}

fn headline(
    trend: Option<&ModuleOutput>,
    outcomes: Option<&ModuleOutput>,
    units: UnitSystem,
    left: Option<NaiveDate>,
) -> String {
    let status = trend
        .and_then(|t| t.text("status"))
        .unwrap_or("insufficient_data");
    let change = outcomes.and_then(|o| o.scalar("change_kg"));
    let rate = trend.and_then(|t| t.scalar("slope_kg_per_week"));
    let since = change
        .map(|c| format!(" Since you started: {}.", fmt::weight_change(c, units)))
        .unwrap_or_default();
    let rate_s = rate
        .map(|r| fmt::rate_per_week(r, units))
        .unwrap_or_default();
    // Someone who has left gets no "last four weeks" status: their records stop at leaving.
    if let Some(w) = left {
        return format!(
            "You left the program on {}; this report shows your records up to then.{since}",
            fmt::date(w)
        );
    }
    match status {
        "losing" => format!(
            "Your weight trend is going down, by about {rate_s} over the last four weeks.{since}"
        ),
        "plateau" => {
            format!("Your weight has held steady over the last four weeks (a plateau).{since}")
        }
        "regaining" => {
            format!("Your weight trend has been rising over the last four weeks ({rate_s}).{since}")
        }
        "stable" => format!("Your weight has been stable over the last four weeks.{since}"),
        "unclear" => format!(
            "Your weight has changed little over the last four weeks (about {rate_s}); more regular weigh-ins would show whether it has levelled off.{since}"
        ),
        _ => format!(
            "There are too few recent weigh-ins to see how your weight moved over the last four weeks.{since}"
        ),
    }
}

/// The numbers behind a plateau reading, in plain words and the program's display units (the
/// module's own `evidence` text, in kg and model terms, stays in the tidy tables).
fn plateau_evidence(t: &Table, r: &[Cell], units: UnitSystem) -> String {
    let mut parts = Vec::new();
    if let (Some(before), Some(during)) = (
        cell_num(t, r, "implied_intake_before_kcal_per_day"),
        cell_num(t, r, "implied_intake_during_kcal_per_day"),
    ) {
        parts.push(format!(
            "Your weight trend implies about {} a day before the plateau and about {} a day during it.",
            fmt::kcal(before),
            fmt::kcal(during)
        ));
    }
    if let (Some(expected), Some(observed)) = (
        cell_num(t, r, "expected_slope_kg_per_week"),
        cell_num(t, r, "observed_slope_kg_per_week"),
    ) {
        parts.push(format!(
            "With the intake you logged, the model expects a change of {} at this weight; the trend shows {}.",
            fmt::rate_per_week(expected, units),
            fmt::rate_per_week(observed, units)
        ));
    }
    parts.join(" ")
}

/// Person-first words for a WHO BMI range (the standard labels stay in the tidy metrics and
/// group tables): ` — your BMI is in the range the WHO calls …`.
fn bmi_range_words(code: &str) -> String {
    // WHO 2000, Technical Report Series 894: cut-offs 18.5, 25, 30, 35, 40.
    let (name, range) = match code {
        "underweight" => ("underweight", "below 18.5"),
        "normal" => ("normal weight", "18.5 to 24.9"),
        "overweight" => ("pre-obese (overweight)", "25 to 29.9"),
        "obesity_class_1" => ("obesity class I", "30 to 34.9"),
        "obesity_class_2" => ("obesity class II", "35 to 39.9"),
        "obesity_class_3" => ("obesity class III", "40 or more"),
        _ => return String::new(),
    };
    format!("; your BMI is in the range {range}, which the WHO calls “{name}”")
}

fn weight_chart(
    trend: Option<&ModuleOutput>,
    energy: Option<&ModuleOutput>,
    target_kg: Option<f64>,
    units: UnitSystem,
    plan: &RunPlan,
) -> (Chart, ChartView) {
    let conv = |kg: f64| fmt::weight_value(kg, units);
    let unit = fmt::weight_unit(units);
    let mut lines = Vec::new();
    let mut bands = Vec::new();
    let mut spans = Vec::new();
    let mut table = TableView {
        header: vec![
            "Week ending".into(),
            format!("Trend ({unit})"),
            format!("95 % band ({unit})"),
        ],
        rows: Vec::new(),
    };
    if let Some(t) = trend {
        if let Some(s) = t.series("weigh_ins") {
            lines.push(LineSeries {
                label: "Weigh-ins".into(),
                points: s.points.iter().map(|p| (p.date, conv(p.value))).collect(),
                style: LineStyle::Dots,
            });
        }
        if let Some(s) = t.series("weight_trend") {
            bands.push(BandSeries {
                label: "Trend 95 % band".into(),
                points: s
                    .points
                    .iter()
                    .filter_map(|p| Some((p.date, conv(p.lower?), conv(p.upper?))))
                    .collect(),
            });
            lines.push(LineSeries {
                label: "Trend".into(),
                points: s.points.iter().map(|p| (p.date, conv(p.value))).collect(),
                style: LineStyle::Solid,
            });
            let n = s.points.len();
            for (i, p) in s.points.iter().enumerate() {
                if (n - 1 - i) % 7 == 0 {
                    table.rows.push(vec![
                        fmt::date(p.date),
                        fmt::fixed(conv(p.value), 1),
                        match (p.lower, p.upper) {
                            (Some(l), Some(u)) => {
                                format!("{}–{}", fmt::fixed(conv(l), 1), fmt::fixed(conv(u), 1))
                            }
                            _ => String::new(),
                        },
                    ]);
                }
            }
        }
        if let Some(pt) = t.table("periods") {
            for r in &pt.rows {
                let kind = match cell_str(pt, r, "kind").as_str() {
                    "plateau" => SpanKind::Plateau,
                    "regain" => SpanKind::Regain,
                    _ => continue,
                };
                if let (Some(from), Some(to)) = (cell_date(pt, r, "start"), cell_date(pt, r, "end"))
                {
                    let label = if kind == SpanKind::Plateau {
                        "Plateau"
                    } else {
                        "Regain"
                    };
                    spans.push(Span {
                        label: label.into(),
                        from,
                        to,
                        kind,
                    });
                }
            }
        }
    }
    // No forecast (e.g. after leaving the program): no empty "Forecast" entry in the legend.
    if let Some(s) = energy
        .and_then(|e| e.series("forecast_weight"))
        .filter(|s| !s.points.is_empty())
    {
        bands.push(BandSeries {
            label: "Forecast band".into(),
            points: s
                .points
                .iter()
                .filter_map(|p| Some((p.date, conv(p.lower?), conv(p.upper?))))
                .collect(),
        });
        lines.push(LineSeries {
            label: "Forecast".into(),
            points: s.points.iter().map(|p| (p.date, conv(p.value))).collect(),
            style: LineStyle::Dashed,
        });
    }
    let mut hlines = Vec::new();
    if let Some(t) = target_kg {
        hlines.push(HLine {
            label: format!("Target {}", fmt::weight(t, units)),
            y: conv(t),
        });
    }
    let alt = format!(
        "Weight chart for {} to {}: weigh-ins, the smoothed trend with its 95 % band{}{}.",
        fmt::date(plan.program.info.start),
        fmt::date(plan.period.to),
        if spans.is_empty() {
            ""
        } else {
            ", plateau and regain periods shaded"
        },
        if target_kg.is_some() {
            ", and the target weight"
        } else {
            ""
        }
    );
    let chart = Chart::Line(LineChart {
        title: "Weight".into(),
        y_label: unit.into(),
        lines,
        bands,
        spans,
        hlines,
        alt_text: alt.clone(),
    });
    (
        chart,
        ChartView {
            title: "Weight and trend".into(),
            alt,
            table,
        },
    )
}

fn energy_section(e: &ModuleOutput) -> (EnergyView, Option<Chart>) {
    let mut items = Vec::new();
    let push = |items: &mut Vec<Kv>, label: &str, name: &str| {
        if let Some(s) = e.scalar_full(name)
            && let Some(v) = s.value
        {
            let mut text = fmt::kcal_per_day(v);
            if let (Some(l), Some(u)) = (s.lower, s.upper) {
                text = format!("{text} (95 % interval {}–{})", fmt::int(l), fmt::int(u));
            }
            items.push(Kv::new(label, &text));
        }
    };
    push(&mut items, "Resting energy (estimated)", "rmr_kcal_per_day");
    push(
        &mut items,
        "Activity, beyond resting",
        "activity_net_kcal_per_day",
    );
    push(&mut items, "Total energy use per day", "tdee_kcal_per_day");
    push(
        &mut items,
        "Intake you logged (average)",
        "logged_intake_kcal_per_day",
    );
    push(
        &mut items,
        "Intake implied by your weight trend",
        "implied_intake_kcal_per_day",
    );
    if let Some(g) = e.scalar("intake_gap_kcal_per_day") {
        items.push(Kv::new("Implied minus logged", &fmt::kcal_change(g)));
    }
    if let Some(b) = e.scalar("energy_balance_kcal_per_day") {
        items.push(Kv::new("Energy balance (implied)", &fmt::kcal_change(b)));
    }
    if let Some(eq) = e.texts.iter().find(|t| t.name == "rmr_equation") {
        items.push(Kv::new("Resting-energy equation", &eq.label));
    }
    let explanation = "Energy use is estimated from a published equation and your logged activity (net of what you would burn resting). The intake implied by your weight trend comes from a published model of how body weight responds to energy balance; it often differs from logged intake, because logging everything is hard. Ranges are 95 % intervals.".to_string();
    let mut table = TableView {
        header: vec![
            "Week of".into(),
            "Energy use (kcal/day)".into(),
            "Logged intake".into(),
            "Implied intake".into(),
        ],
        rows: Vec::new(),
    };
    let mut chart = None;
    if let Some(t) = e.table("weekly_energy") {
        let mut series: [Vec<(NaiveDate, f64)>; 3] = Default::default();
        for r in &t.rows {
            let Some(d) = cell_date(t, r, "week_start") else {
                continue;
            };
            let vals = [
                cell_num(t, r, "expenditure_kcal_per_day"),
                cell_num(t, r, "logged_intake_kcal_per_day"),
                cell_num(t, r, "implied_intake_kcal_per_day"),
            ];
            for (i, v) in vals.iter().enumerate() {
                if let Some(v) = v {
                    series[i].push((d, *v));
                }
            }
            let mut row = vec![fmt::date(d)];
            row.extend(
                vals.iter()
                    .map(|v| v.map(fmt::int).unwrap_or_else(|| "–".into())),
            );
            table.rows.push(row);
        }
        let [exp, logged, implied] = series;
        let alt = "Weekly energy: estimated energy use, logged intake and the intake implied by the weight trend, in kcal per day.".to_string();
        chart = Some(Chart::Line(LineChart {
            title: "Energy per day, by week".into(),
            y_label: "kcal/day".into(),
            lines: vec![
                LineSeries {
                    label: "Energy use".into(),
                    points: exp,
                    style: LineStyle::Solid,
                },
                LineSeries {
                    label: "Logged intake".into(),
                    points: logged,
                    style: LineStyle::Dots,
                },
                LineSeries {
                    label: "Implied intake".into(),
                    points: implied,
                    style: LineStyle::Dashed,
                },
            ],
            bands: vec![],
            spans: vec![],
            hlines: vec![],
            alt_text: alt,
        }));
    }
    let view = EnergyView {
        items,
        explanation,
        chart: ChartView {
            title: "Energy by week".into(),
            alt: "Weekly energy use, logged intake and implied intake (kcal/day).".into(),
            table,
        },
    };
    (view, chart)
}

/// What could not be read of the activity log: `None` when everything was; otherwise how
/// many rows were dropped, or that the whole file was not used.
#[derive(Debug, Clone, PartialEq)]
enum ActivityUnread {
    Nothing,
    Rows(u64),
    File,
}

fn activity_unread(diags: &[Diagnostic]) -> ActivityUnread {
    let mut rows = 0;
    for d in diags.iter().filter(|d| d.file.ends_with("/activity.csv")) {
        if d.severity == Severity::Error {
            return ActivityUnread::File;
        }
        // Dropped rows, not duplicates (which were counted once) or ignored values.
        if d.message.contains("dropped") && !d.message.contains("duplicate") {
            // "unknown activity `x` in 12 rows (…)" counts its rows; other messages are one row.
            let n = d
                .message
                .split_once("` in ")
                .and_then(|(_, rest)| rest.split(' ').next())
                .and_then(|n| n.parse::<u64>().ok())
                .unwrap_or(1);
            rows += n;
        }
    }
    if rows == 0 {
        ActivityUnread::Nothing
    } else {
        ActivityUnread::Rows(rows)
    }
}

fn adherence_section(
    a: &ModuleOutput,
    target: f64,
    unread: &ActivityUnread,
) -> (AdherenceView, Chart) {
    let mut items = Vec::new();
    let f1 = |n: &str| a.scalar(n).map(|v| fmt::fixed(v, 1));
    if let Some(v) = f1("weigh_ins_per_week") {
        items.push(Kv::new("Weigh-ins per week", &v));
    }
    if let Some(v) = f1("food_log_days_per_week") {
        items.push(Kv::new("Days with a food log per week", &v));
    }
    if let Some(v) = a.scalar("activity_minutes_per_week") {
        // Never "0 minutes" when the log could not be read: say so instead.
        let text = match unread {
            ActivityUnread::File => {
                "activity could not be read (activity.csv was not used; see the notes on your data)"
                    .to_string()
            }
            ActivityUnread::Rows(n) if v == 0.0 => format!(
                "activity could not be read ({n} row{} left out; see the notes on your data)",
                if *n == 1 { "" } else { "s" }
            ),
            ActivityUnread::Rows(n) => format!(
                "{} (target {}); {n} activity row{} could not be read and {} not counted",
                fmt::fixed(v, 0),
                fmt::fixed(target, 0),
                if *n == 1 { "" } else { "s" },
                if *n == 1 { "is" } else { "are" }
            ),
            ActivityUnread::Nothing => {
                format!("{} (target {})", fmt::fixed(v, 0), fmt::fixed(target, 0))
            }
        };
        items.push(Kv::new(
            "Activity minutes per week (moderate-equivalent)",
            &text,
        ));
    }
    if let (Some(att), Some(off)) = (
        a.scalar("sessions_attended_to_date"),
        a.scalar("sessions_offered_to_date"),
    ) && off > 0.0
    {
        items.push(Kv::new(
            "Group sessions attended since you joined",
            &format!("{att} of {off}"),
        ));
    }
    if let Some(v) = a.scalar("longest_weigh_in_streak_days") {
        items.push(Kv::new(
            "Longest run of daily weigh-ins",
            &format!("{} days", fmt::fixed(v, 0)),
        ));
    }
    let mut table = TableView {
        header: vec![
            "Week of".into(),
            "Weigh-ins".into(),
            "Food-log days".into(),
            "Activity min".into(),
            "Sessions".into(),
        ],
        rows: Vec::new(),
    };
    let mut bars = Vec::new();
    if let Some(t) = a.table("weekly") {
        for r in &t.rows {
            let d = cell_date(t, r, "week_start");
            let mins = cell_num(t, r, "activity_minutes").unwrap_or(0.0);
            bars.push(Bar {
                label: d
                    .map(|d| d.format("%-d %b").to_string())
                    .unwrap_or_default(),
                value: mins,
                suppressed: false,
            });
            let offered = cell_str(t, r, "sessions_offered");
            table.rows.push(vec![
                d.map(fmt::date).unwrap_or_default(),
                cell_str(t, r, "weigh_ins"),
                cell_str(t, r, "food_log_days"),
                fmt::fixed(mins, 0),
                if offered.is_empty() || offered == "0" {
                    "–".into()
                } else {
                    format!("{} of {offered}", cell_str(t, r, "sessions_attended"))
                },
            ]);
        }
    }
    let alt = format!(
        "Moderate-equivalent activity minutes by week, against the target of {} minutes.",
        fmt::fixed(target, 0)
    );
    let chart = Chart::Bars(BarChart {
        title: "Activity minutes by week".into(),
        y_label: "min/week".into(),
        bars,
        target: Some(target),
        alt_text: alt.clone(),
    });
    (
        AdherenceView {
            items,
            chart: ChartView {
                title: "Adherence by week".into(),
                alt,
                table,
            },
        },
        chart,
    )
}

#[cfg(test)]
mod activity_unread_tests {
    use super::*;
    use cohortpress_metric_api::Scalar;

    fn adherence(minutes: f64) -> ModuleOutput {
        ModuleOutput {
            scalars: vec![Scalar {
                name: "activity_minutes_per_week".into(),
                value: Some(minutes),
                unit: "min".into(),
                lower: None,
                upper: None,
                label: "Activity minutes per week".into(),
            }],
            ..Default::default()
        }
    }

    fn shown(minutes: f64, diags: &[Diagnostic]) -> String {
        let (view, _) = adherence_section(&adherence(minutes), 150.0, &activity_unread(diags));
        view.items
            .iter()
            .find(|k| k.label.starts_with("Activity minutes"))
            .unwrap()
            .value
            .clone()
    }

    #[test]
    fn dropped_activity_rows_are_not_shown_as_zero_minutes() {
        let file = "participants/P1/activity.csv";
        let unknown = Diagnostic::warning(
            file,
            "unknown activity `zumba gold` in 104 rows (first at line 2); without a MET value the rows are dropped",
        );
        assert_eq!(
            shown(0.0, std::slice::from_ref(&unknown)),
            "activity could not be read (104 rows left out; see the notes on your data)"
        );
        assert_eq!(
            shown(90.0, &[unknown]),
            "90 (target 150); 104 activity rows could not be read and are not counted"
        );
        let lost = Diagnostic::error(file, "no header row: missing required columns");
        assert!(
            shown(0.0, &[lost])
                .starts_with("activity could not be read (activity.csv was not used")
        );
        // Duplicates and other files do not count; a clean log shows its minutes.
        let dup = Diagnostic::warning(
            file,
            "identical to line 3 in every column, time included; the row is dropped as a duplicate",
        );
        let other = Diagnostic::warning(
            "participants/P1/weights.csv",
            "implausible weight; the row is dropped",
        );
        assert_eq!(shown(0.0, &[dup, other]), "0 (target 150)");
    }
}

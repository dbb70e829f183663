//! PDF layout of the reports: the same report model as the HTML templates, laid out as a
//! [`crate::render::pdf::Document`]. Kept in code rather than templates because a PDF page needs
//! explicit layout (page breaks, repeated table headers) that handlebars cannot express.

use super::group::GroupReportModel;
use super::participant::ParticipantReport;
use super::{Kv, RenderError, TableView};
use crate::render::pdf::{Block, Document, Tone, render_pdf};
use chrono::{NaiveDate, NaiveDateTime};

fn kv(items: &[Kv]) -> Block {
    Block::KeyValues(
        items
            .iter()
            .map(|k| (k.label.clone(), k.value.clone()))
            .collect(),
    )
}

fn table(t: &TableView, widths: Vec<f32>) -> Block {
    Block::Table {
        header: t.header.clone(),
        rows: t.rows.clone(),
        widths,
    }
}

/// Creation time of a report: the end of its period (never the clock), so an unchanged re-run
/// gives identical bytes.
fn created(period_to: &str) -> NaiveDateTime {
    NaiveDate::parse_from_str(period_to, "%Y-%m-%d")
        .unwrap_or_default()
        .and_hms_opt(23, 59, 0)
        .expect("valid time")
}

/// The participant report as PDF bytes.
pub fn participant(r: &ParticipantReport) -> Result<Vec<u8>, RenderError> {
    let c = &r.ctx;
    let mut b = Vec::new();
    b.push(Block::Heading {
        level: 1,
        text: c.participant.display_name.clone(),
    });
    b.push(Block::Small(format!(
        "Private progress report · {} · prepared {}",
        c.program.period_label, c.program.as_of
    )));
    b.push(Block::Paragraph(c.headline.clone()));
    b.push(Block::Heading {
        level: 2,
        text: "Where you stand".into(),
    });
    b.push(kv(&c.summary));
    if !c.milestones.is_empty() {
        b.push(Block::Bullets(
            c.milestones
                .iter()
                .map(|m| {
                    if m.reached {
                        format!("{}: reached {}", m.label, m.reached_on)
                    } else {
                        format!("{}: not yet", m.label)
                    }
                })
                .collect(),
        ));
    }
    b.push(Block::Heading {
        level: 2,
        text: c.weight_chart.title.clone(),
    });
    b.push(Block::Chart(r.weight_chart.clone()));
    b.push(Block::Small(format!(
        "{} The trend smooths out day-to-day water swings; the shaded band is its 95 % range.",
        c.weight_chart.alt
    )));
    if let Some(e) = &c.energy {
        b.push(Block::Heading {
            level: 2,
            text: "Energy balance".into(),
        });
        b.push(kv(&e.items));
        b.push(Block::Small(e.explanation.clone()));
        if let Some(ch) = &r.energy_chart {
            b.push(Block::Chart(ch.clone()));
        }
    }
    if let Some(a) = &c.adherence {
        b.push(Block::Heading {
            level: 2,
            text: "Your habits, week by week".into(),
        });
        b.push(kv(&a.items));
        if let Some(ch) = &r.activity_chart {
            b.push(Block::Chart(ch.clone()));
        }
        b.push(table(&a.chart.table, vec![2.2, 1.2, 1.4, 1.4, 1.2]));
    }
    let g = &c.guidance;
    b.push(Block::Heading {
        level: 2,
        text: g.heading.clone(),
    });
    for p in &c.plateaus {
        b.push(Block::Callout {
            tone: Tone::Info,
            title: format!("Plateau, {}", p.period),
            text: p.verdict.clone(),
        });
        b.push(Block::Small(format!(
            "The numbers behind this: {}",
            p.evidence
        )));
    }
    for para in &g.paragraphs {
        b.push(Block::Paragraph(para.clone()));
    }
    if !g.options.is_empty() {
        b.push(Block::Paragraph(g.options_intro.clone()));
        b.push(Block::Bullets(
            g.options.iter().map(|o| o.text.clone()).collect(),
        ));
        b.push(Block::Small(g.options_note.clone()));
    }
    for para in &g.closing {
        b.push(Block::Paragraph(para.clone()));
    }
    if let Some(l) = &c.labs {
        b.push(Block::Heading {
            level: 2,
            text: "Lab values and measurements".into(),
        });
        b.push(table(l, vec![1.3, 1.8, 1.3, 1.3, 1.6]));
        b.push(Block::Small(
            "Ranges follow the American Diabetes Association's Standards of Care. A value in a range is not a diagnosis; your clinician interprets it.".into(),
        ));
    }
    if !c.flags.is_empty() {
        b.push(Block::Heading {
            level: 2,
            text: "Points to note".into(),
        });
        b.push(Block::Bullets(
            c.flags
                .iter()
                .map(|f| {
                    if f.clinical {
                        format!("For review with a licensed clinician: {}", f.message)
                    } else {
                        f.message.clone()
                    }
                })
                .collect(),
        ));
    }
    for x in &c.extra {
        b.push(Block::Heading {
            level: 2,
            text: format!("More measures: {}", x.module),
        });
        b.push(kv(&x.items));
    }
    if !c.data_notes.is_empty() {
        b.push(Block::Heading {
            level: 2,
            text: "About your records".into(),
        });
        b.push(Block::Small(
            "Some entries could not be used as written. They were left out (or corrected where the fix was certain, as noted):".into(),
        ));
        b.push(Block::Bullets(c.data_notes.clone()));
    }
    if !c.module_failures.is_empty() {
        b.push(Block::Small(format!(
            "Some figures could not be computed this month: {}",
            c.module_failures.join("; ")
        )));
    }
    b.push(Block::Callout {
        tone: Tone::Caution,
        title: "Please read".into(),
        text: c.cautions.join(" "),
    });
    let doc = Document {
        title: format!(
            "{} · {}",
            c.participant.display_name, c.program.period_label
        ),
        subject: format!("Private progress report, {}", c.program.title),
        author: c.program.tool.clone(),
        header: format!("{} · {}", c.program.title, c.program.period_label),
        footer: format!("Private · participant {}", c.participant.id),
        blocks: b,
        created: created(&c.program.period_to),
        id_seed: format!(
            "{}/{}/{}",
            c.program.id, c.program.period_to, c.participant.id
        ),
    };
    render_pdf(&doc).map_err(|e| RenderError::Pdf(e.to_string()))
}

/// The clinician follow-up list as PDF bytes.
pub fn followup(c: &super::followup::FollowupContext) -> Result<Vec<u8>, RenderError> {
    let mut b = vec![
        Block::Heading {
            level: 1,
            text: "Clinician follow-up list".into(),
        },
        Block::Small(format!(
            "Private · for {} · {} · prepared {}",
            c.recipient, c.program.period_label, c.program.as_of
        )),
        Block::Paragraph(c.purpose.clone()),
        Block::Paragraph(format!(
            "{} participant(s) with a clinical flag this period; {} with a flag that is new.",
            c.participants, c.with_new
        )),
        Block::Small(c.compared_with.clone()),
    ];
    if c.table.rows.is_empty() {
        b.push(Block::Paragraph(
            "No participant has a clinical flag this period.".into(),
        ));
    } else {
        b.push(table(&c.table, vec![1.4, 1.5, 1.6, 2.1, 2.4, 1.3, 3.2]));
    }
    let doc = Document {
        title: format!("Clinician follow-up list · {}", c.program.period_label),
        subject: format!("Clinician follow-up list, {}", c.program.title),
        author: c.program.tool.clone(),
        header: format!("{} · {}", c.program.title, c.program.period_label),
        footer: format!("Private · for {}", c.recipient),
        blocks: b,
        created: created(&c.program.period_to),
        id_seed: format!("{}/{}/followup", c.program.id, c.program.period_to),
    };
    render_pdf(&doc).map_err(|e| RenderError::Pdf(e.to_string()))
}

/// The group report as PDF bytes.
pub fn group(g: &GroupReportModel) -> Result<Vec<u8>, RenderError> {
    let c = &g.ctx;
    let mut b = Vec::new();
    b.push(Block::Heading {
        level: 1,
        text: "Group summary".into(),
    });
    b.push(Block::Small(format!(
        "{} · {} · de-identified · prepared {}",
        c.program.title, c.program.period_label, c.program.as_of
    )));
    if !c.program.sponsor.is_empty() {
        b.push(Block::Small(format!("For: {}", c.program.sponsor)));
    }
    for note in &c.notes {
        b.push(Block::Paragraph(note.clone()));
    }
    for s in &c.sections {
        b.push(Block::Heading {
            level: 2,
            text: s.title.clone(),
        });
        if let Some(w) = &s.withheld {
            b.push(Block::Paragraph(w.clone()));
            continue;
        }
        b.push(Block::Heading {
            level: 3,
            text: "Enrolment and retention".into(),
        });
        b.push(table(&s.enrolment, vec![3.0, 1.2]));
        b.push(Block::Heading {
            level: 3,
            text: "Weight change".into(),
        });
        b.push(table(&s.outcomes, vec![2.6, 0.9, 1.6, 1.6]));
        b.push(Block::Small(s.outcomes_note.clone()));
        b.push(Block::Heading {
            level: 3,
            text: "Share reaching a loss milestone (intention-to-treat)".into(),
        });
        b.push(table(&s.milestones, vec![2.0, 1.2, 1.2, 1.8]));
        for name in &s.chart_names {
            if let Some((_, ch)) = g.charts.iter().find(|(n, _)| n == name) {
                b.push(Block::Chart(ch.clone()));
            }
        }
        b.push(Block::Heading {
            level: 3,
            text: "Adherence and plateaus".into(),
        });
        b.push(table(&s.adherence, vec![3.0, 1.4]));
    }
    b.push(Block::Callout {
        tone: Tone::Caution,
        title: "About this report".into(),
        text: c.cautions.join(" "),
    });
    let doc = Document {
        title: format!("Group summary · {}", c.program.period_label),
        subject: format!("De-identified group report, {}", c.program.title),
        author: c.program.tool.clone(),
        header: format!("{} · {}", c.program.title, c.program.period_label),
        footer: "De-identified group report".into(),
        blocks: b,
        created: created(&c.program.period_to),
        id_seed: format!("{}/{}/group", c.program.id, c.program.period_to),
    };
    render_pdf(&doc).map_err(|e| RenderError::Pdf(e.to_string()))
}

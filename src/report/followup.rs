//! The clinician follow-up list: every participant with a clinical flag this period, the
//! reason in plain words, the values and dates behind it, and whether it is new this period or
//! was already raised in the period before.
//!
//! It is identified (names and ids) and therefore private: it is written only when
//! `followup.recipient` names who receives it, into its own `followup/` folder, owner-only
//! whatever `--group-readable` says, and nothing from it reaches the group outputs.
//!
//! "New" or "continuing" is decided by computing the flags again for the period before the
//! reported one (same length, ending the day before it starts), from the same inputs. That
//! keeps re-runs byte-identical and needs no earlier output.

use super::Scope;
use super::format as fmt;
use super::templates::TemplateSet;
use super::{ProgramView, RenderError, TableView};
use crate::diag::Diagnostic;
use crate::modules::ModuleResults;
use crate::program::Format;
use chrono::{Months, NaiveDate};
use cohortpress_metric_api::{FlagSeverity, ParticipantData, Period};
use serde::{Deserialize, Serialize};

/// The folder of the follow-up outputs inside the output folder.
pub const FOLDER: &str = "followup";

/// One flag of one participant.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FollowupItem {
    /// Flag code (`fast_loss`, `low_intake`, `lab_diabetes_range` …).
    pub code: String,
    /// The reason in plain words.
    pub reason: String,
    /// The module's message, with the values and dates behind the flag.
    pub details: String,
    /// Dates named in the details (ISO), or the period when none is.
    pub dates: String,
    /// `true` when the flag was not raised for the period before.
    pub new: bool,
    /// `true` when it was seen at follow-up only: raised by weigh-ins after the day someone
    /// who stopped the program left it ([`ModuleResults::follow_up_flags`]).
    #[serde(default)]
    pub at_follow_up: bool,
}

/// A participant's part of the list (kept in their partial result, so `merge` and
/// `--incremental` rebuild the same list).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FollowupRecord {
    /// Participant id.
    pub id: String,
    /// Name from the profile, if any.
    pub name: Option<String>,
    /// Current weight (trend), kg.
    pub weight_kg: Option<f64>,
    /// Current BMI, kg/m².
    pub bmi: Option<f64>,
    /// Change from baseline, %.
    pub change_percent: Option<f64>,
    /// Trend slope over the last four weeks, kg/week.
    pub rate_kg_per_week: Option<f64>,
    /// Mean logged intake in the period, kcal/d.
    pub logged_intake_kcal_per_day: Option<f64>,
    /// Date of the last weigh-in up to the period's end (ISO).
    pub last_weigh_in: Option<String>,
    /// Date the participant left the program, if on or before the period's end (ISO).
    #[serde(default)]
    pub left_program: Option<String>,
    /// `true` when leaving on `left_program` was a withdrawal of consent to the use of their
    /// data (`withdrawal_reason: consent`, the default), not only of the program: nothing
    /// after that day is read, so a flag of a later period comes from their records up to it
    /// ([`withdrawn_before`]).
    #[serde(default)]
    pub consent_withdrawn: bool,
    /// The clinical flags.
    pub items: Vec<FollowupItem>,
}

/// The reason a flag is on the list, in plain words. It names no threshold: a program sets its
/// own (`max_loss_kg_per_week`, `low_bmi_losing_below`, …), and the item's `details` — the
/// module's own message — gives the figures that applied.
pub fn reason(code: &str) -> &'static str {
    match code {
        "fast_loss" => {
            "Weight coming down faster than the program's safe-loss limit for weeks on end"
        }
        "very_low_intake" => {
            "Logged intake very low (below the program's very-low-intake threshold on average)"
        }
        "very_low_implied_intake" => {
            "Weight coming down as fast as only a very low intake would make it, or faster than eating nothing explains (a very low intake, or a step in the weigh-ins?)"
        }
        "forecast_underweight" => {
            "At the intake the weight trend implies, weight would fall into the underweight range, or further within it, before the forecast's end"
        }
        "low_intake" => {
            "Intake below the usual floor for eating less without supervision, by the food log with the weight trend not ruling it out, by the weight trend alone, or by the food log when there are no weigh-ins to check it"
        }
        "below_resting_intake" => {
            "Intake below resting energy expenditure for weeks, on the weight trend's evidence (alone, or agreeing with the food log)"
        }
        "low_bmi" => {
            "BMI in the underweight range, or low for the person's age while weight is still coming down"
        }
        "lab_diabetes_range" => {
            "Latest glucose or HbA1c in the diabetes range (ADA Standards of Care)"
        }
        "lab_low_glucose" => {
            "Latest fasting glucose below 70 mg/dL (3.9 mmol/L), low blood sugar (ADA Standards of Care)"
        }
        "lab_severe_bp" => {
            "Latest blood pressure above 180/120 mmHg, severe high blood pressure (ACC/AHA 2017): to be checked soon"
        }
        "lab_low_egfr" => {
            "Latest eGFR below 60 mL/min/1.73 m², kidney function in KDIGO 2012 category G3a or G3b"
        }
        "lab_very_low_egfr" => {
            "Latest eGFR below 30 mL/min/1.73 m², kidney function in KDIGO 2012 category G4 or G5: the report makes no suggestions for change"
        }
        "medication_review" => {
            "Takes a glucose-lowering medicine while losing fast, eating little or with a low fasting glucose: the dose may need review"
        }
        "fast_gain" => {
            "Weight going up faster than the program's limit for weeks on end (fluid, or a change of scale?)"
        }
        "weigh_in_step" => {
            "Weigh-ins jumped by several kilograms within days and stayed there (a new scale, or a real change of fluid or weight?)"
        }
        "pregnancy" => "Pregnancy noted in the profile: the report makes no suggestions for change",
        "breastfeeding" => {
            "Breastfeeding noted in the profile: the report makes no suggestions for change"
        }
        LABS_NOT_READ => {
            "Lab results that could not be read, so they were not checked against the diabetes range or any other cut-off: check the values in labs.csv"
        }
        _ => "Raised for review by a licensed clinician",
    }
}

/// The code of the list's item saying that lab rows of a participant could not be read: no
/// clinical flag, but a lab value nobody checked (an HbA1c in a unit the reader does not know
/// was a warning in the data-quality list only, and the clinician never heard of it).
pub const LABS_NOT_READ: &str = "labs_not_read";

/// Up to this many unread lab rows are named in the item's details; the rest are counted.
const LAB_ROWS_NAMED: usize = 5;

/// The details of [`LABS_NOT_READ`] from a participant's diagnostics: each warning or error of
/// their `labs.csv` that drops a row or the file, with its line; `None` when there is none.
fn labs_not_read(diagnostics: &[Diagnostic]) -> Option<String> {
    let unread: Vec<String> = diagnostics
        .iter()
        .filter(|d| {
            d.file.ends_with("/labs.csv")
                && (d.message.contains("dropped") || d.message.contains("not used"))
        })
        .map(|d| {
            let at = d.line.map(|l| format!(" line {l}")).unwrap_or_default();
            let found = d
                .found
                .as_deref()
                .map(|f| format!(" (found {f})"))
                .unwrap_or_default();
            format!("labs.csv{at}: {}{found}", d.message)
        })
        .collect();
    if unread.is_empty() {
        return None;
    }
    let mut text = unread
        .iter()
        .take(LAB_ROWS_NAMED)
        .cloned()
        .collect::<Vec<_>>()
        .join("; ");
    if unread.len() > LAB_ROWS_NAMED {
        text.push_str(&format!(
            "; and {} more (see data-quality.csv)",
            unread.len() - LAB_ROWS_NAMED
        ));
    }
    Some(text)
}

/// The period before `p`: the previous calendar month when `p` is one whole month, else the
/// same number of days just before it. `None` when it would start before the program.
pub fn previous_period(p: Period, program_start: NaiveDate) -> Option<Period> {
    // One whole month as the reports name it (a 13-month span from January to January is
    // not one).
    let prev = if super::is_one_whole_month(p.from, p.to) {
        let from = p.from.checked_sub_months(Months::new(1))?;
        Period {
            from,
            to: p.from.pred_opt()?,
        }
    } else {
        let len = (p.to - p.from).num_days();
        let to = p.from.pred_opt()?;
        Period {
            from: to - chrono::Duration::days(len),
            to,
        }
    };
    (prev.to >= program_start).then_some(Period {
        from: prev.from.max(program_start),
        to: prev.to,
    })
}

/// The clinical flags: (code, message, seen at follow-up only).
fn clinical_codes(results: &ModuleResults) -> Vec<(String, String, bool)> {
    results
        .outputs
        .iter()
        .flat_map(|(m, o)| o.flags.iter().map(move |f| (m, f)))
        .filter(|(_, f)| f.severity == FlagSeverity::Clinical)
        .map(|(m, f)| {
            (
                f.code.clone(),
                f.message.clone(),
                results.at_follow_up(m, &f.code),
            )
        })
        .collect()
}

fn iso_dates(text: &str) -> Vec<String> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i + 10 <= b.len() {
        // `get`, not slicing: a window may cut a character of several bytes (`kg/m²`), and
        // slicing there panicked, ending the whole run whenever a low-BMI flag was listed.
        let s = text.get(i..i + 10);
        let boundary_before = i == 0 || !b[i - 1].is_ascii_digit();
        let boundary_after = b.get(i + 10).is_none_or(|c| !c.is_ascii_digit());
        if let Some(s) = s
            && boundary_before
            && boundary_after
            && NaiveDate::parse_from_str(s, "%Y-%m-%d").is_ok()
        {
            // Each date once, in the order first named: the fast-loss flag names its run's
            // end twice ("from 2026-06-01 to 2026-11-27 (the last 21, 2026-11-06 to
            // 2026-11-27…)").
            if !out.iter().any(|d| d == s) {
                out.push(s.to_string());
            }
            i += 10;
        } else {
            i += 1;
        }
    }
    out
}

/// This participant's part of the follow-up list: `None` when the list is off or they have no
/// clinical flag. Runs the modules once more for the period before, to tell new flags from
/// continuing ones.
pub fn for_participant(
    plan: &Scope<'_>,
    data: &ParticipantData,
    results: &ModuleResults,
    diagnostics: &[Diagnostic],
) -> Option<FollowupRecord> {
    plan.program.def.followup.as_ref()?;
    let flags = clinical_codes(results);
    let unread = labs_not_read(diagnostics);
    if flags.is_empty() && unread.is_none() {
        return None;
    }
    let before: Vec<String> = previous_period(plan.period, plan.program.info.start)
        .filter(|p| p.to >= data.profile.enrolled)
        .map(|p| {
            clinical_codes(&plan.modules.run(&plan.program.info, p, plan.as_of, data))
                .into_iter()
                .map(|(c, _, _)| c)
                .collect()
        })
        .unwrap_or_default();
    let v = results.views();
    let (trend, outcomes, energy) = (v.trend.as_ref(), v.outcomes.as_ref(), v.energy.as_ref());
    let period = format!("{} to {}", plan.period.from, plan.period.to);
    let left_program = data.profile.withdrew.filter(|w| *w <= plan.period.to);
    let consent_withdrawn = left_program.is_some() && !data.profile.follow_up_weigh_ins();
    // Withdrew consent before this period: every flag comes from records up to that day, the
    // same as the period before's, and is neither new nor continuing.
    let withdrawn_earlier = consent_withdrawn && left_program.is_some_and(|w| w < plan.period.from);
    let mut items: Vec<FollowupItem> = flags
        .into_iter()
        .map(|(code, message, at_follow_up)| {
            let dates = iso_dates(&message);
            FollowupItem {
                at_follow_up,
                reason: reason(&code).into(),
                details: fmt::tidy_message(&message),
                dates: if dates.is_empty() {
                    period.clone()
                } else {
                    dates.join("; ")
                },
                new: !before.contains(&code) && !withdrawn_earlier,
                code,
            }
        })
        .collect();
    items.extend(unread.map(|details| FollowupItem {
        code: LABS_NOT_READ.into(),
        reason: reason(LABS_NOT_READ).into(),
        details,
        dates: period.clone(),
        new: false,
        at_follow_up: false,
    }));
    Some(FollowupRecord {
        id: data.profile.id.clone(),
        name: data.profile.name.clone(),
        weight_kg: trend
            .and_then(|t| t.current_weight_kg.value)
            .or_else(|| outcomes.and_then(|o| o.current_weight_kg.value)),
        bmi: outcomes.and_then(|o| o.bmi_current_kg_m2),
        change_percent: outcomes.and_then(|o| o.change_percent),
        rate_kg_per_week: trend.and_then(|t| t.slope_kg_per_week.value),
        logged_intake_kcal_per_day: energy.and_then(|e| e.logged_intake_kcal_per_day.value),
        last_weigh_in: data
            .weights
            .iter()
            .rev()
            .find(|w| w.date <= plan.period.to)
            .map(|w| w.date.to_string()),
        left_program: left_program.map(|w| w.to_string()),
        consent_withdrawn,
        items,
    })
}

/// The day `r` withdrew consent, when that was before `period_from` (the first day of the
/// period listed): their records end there, so their flags are "before withdrawal", neither
/// new nor continuing. In the sample program's September list SG-037, who withdrew consent on
/// 5 June, was "continuing" for a fasting glucose and an HbA1c of 20 April, as in every month
/// after June, though nothing of theirs had been read since.
pub fn withdrawn_before(r: &FollowupRecord, period_from: NaiveDate) -> Option<NaiveDate> {
    r.left_program
        .as_deref()
        .and_then(|d| NaiveDate::parse_from_str(d, "%Y-%m-%d").ok())
        .filter(|d| r.consent_withdrawn && *d < period_from)
}

/// What `followup.html.hbs` sees.
#[derive(Debug, Clone, Serialize)]
pub struct FollowupContext {
    /// Program and period.
    pub program: ProgramView,
    /// Who receives the list (`followup.recipient`).
    pub recipient: String,
    /// Who should see it and why.
    pub purpose: String,
    /// Number of participants listed.
    pub participants: usize,
    /// Of whom with at least one flag new this period.
    pub with_new: usize,
    /// The two counts in a sentence, with the right plurals.
    pub summary: String,
    /// The previous period compared with, in words (or why there is none).
    pub compared_with: String,
    /// One row per flag: participant, name, status, reason, values, dates, details.
    pub table: TableView,
}

/// A BMI to one decimal as the participant's report and the flags print it: never rounded
/// across a WHO cut-off (WHO 2000, TRS 894; 18.46 is underweight and prints 18.4, not 18.5).
fn bmi_shown(b: f64) -> String {
    fmt::fixed(cohortpress_metric_outcomes::bmi_one_decimal(b), 1)
}

fn values(r: &FollowupRecord, plan: &Scope<'_>) -> String {
    let units = plan.program.info.units;
    let mut v = Vec::new();
    if let Some(w) = r.weight_kg {
        v.push(format!("weight {}", fmt::weight(w, units)));
    }
    if let Some(b) = r.bmi {
        v.push(format!("BMI {}", bmi_shown(b)));
    }
    if let Some(c) = r.change_percent {
        v.push(format!("change {}", fmt::percent_change(c)));
    }
    if let Some(s) = r.rate_kg_per_week {
        v.push(format!("last 4 weeks {}", fmt::rate_per_week(s, units)));
    }
    if let Some(i) = r.logged_intake_kcal_per_day {
        v.push(format!("logged intake {}", fmt::kcal_per_day(i)));
    }
    if let Some(d) = &r.last_weigh_in
        && let Ok(d) = NaiveDate::parse_from_str(d, "%Y-%m-%d")
    {
        v.push(format!("last weigh-in {}", fmt::date(d)));
    }
    if let Some(d) = &r.left_program
        && let Ok(d) = NaiveDate::parse_from_str(d, "%Y-%m-%d")
    {
        if r.consent_withdrawn {
            v.push(format!("withdrew consent {}", fmt::date(d)));
        } else {
            v.push(format!("left the program {}", fmt::date(d)));
        }
    }
    v.join("; ")
}

/// The Status column: new or continuing, and for a flag seen at follow-up only, that it was
/// seen after the person left (SG-001 of the sample program, who stopped the program on
/// 15 Aug 2026, was listed as "new" for a low BMI that only follow-up weigh-ins showed, with
/// nothing to tell it from a finding of the program).
///
/// Someone who withdrew consent is not "continuing": before the period, their flags are
/// "before withdrawal" ([`withdrawn_before`]); within it, the status says their records end on
/// that day.
fn status(it: &FollowupItem, r: &FollowupRecord, period_from: NaiveDate) -> String {
    if it.code == LABS_NOT_READ {
        return "not read".into();
    }
    if let Some(d) = withdrawn_before(r, period_from) {
        return format!(
            "before withdrawal: raised by their records up to {}, when they withdrew consent; nothing later is read",
            fmt::date(d)
        );
    }
    let s = if it.new { "new" } else { "continuing" };
    let left = r
        .left_program
        .as_deref()
        .and_then(|d| NaiveDate::parse_from_str(d, "%Y-%m-%d").ok());
    match left {
        Some(d) if it.at_follow_up => format!(
            "{s}; seen at follow-up, after leaving the program on {}",
            fmt::date(d)
        ),
        Some(d) if r.consent_withdrawn => format!(
            "{s}; withdrew consent on {}, nothing later is read",
            fmt::date(d)
        ),
        _ => s.into(),
    }
}

fn pretty_dates(s: &str) -> String {
    fmt::tidy_message(s)
}

/// Who should see the list, and why (printed on it and in docs/GUIDE.md).
pub const PURPOSE: &str = "This list is for the program's clinician (or the licensed professional the program names), so that each participant whose records raised a clinical flag is offered a review. It names people and holds health data: keep it with clinical records, share it with nobody else, and do not use it to judge or rank participants. Flags come from self-reported records and published cut-offs; they call for a conversation, not a diagnosis.";

/// The list's opening line: how many participants it holds and how many with a new flag. It
/// read "3 participant(s) with a clinical flag this period; 0 with a flag that is new" (sample
/// program, September 2026).
fn summary_line(participants: usize, with_new: usize) -> String {
    match (participants, with_new) {
        (0, _) => "No participant has a clinical flag this period.".into(),
        (1, 0) => {
            "1 participant with a clinical flag this period; no flag of theirs is new.".into()
        }
        (1, _) => "1 participant with a clinical flag this period; a flag of theirs is new.".into(),
        (n, 0) => {
            format!("{n} participants with a clinical flag this period; none of the flags is new.")
        }
        (n, k) => format!(
            "{n} participants with a clinical flag this period; {k} of them with a flag that is new."
        ),
    }
}

/// The follow-up context for a set of records (sorted by id).
pub fn context(plan: &Scope<'_>, records: &[FollowupRecord]) -> FollowupContext {
    let recipient = plan
        .program
        .def
        .followup
        .as_ref()
        .map(|f| f.recipient.trim().to_string())
        .unwrap_or_default();
    let compared_with = match previous_period(plan.period, plan.program.info.start) {
        Some(p) => format!(
            "“New” means the flag was not raised for {} to {}; “continuing” means it was.",
            fmt::date(p.from),
            fmt::date(p.to)
        ),
        None => "This is the program's first period, so every flag is new.".into(),
    };
    let with_new = records
        .iter()
        .filter(|r| r.items.iter().any(|i| i.new))
        .count();
    let flagged = records
        .iter()
        .filter(|r| r.items.iter().any(|i| i.code != LABS_NOT_READ))
        .count();
    let unread = records
        .iter()
        .filter(|r| r.items.iter().any(|i| i.code == LABS_NOT_READ))
        .count();
    let mut summary = summary_line(flagged, with_new);
    let withdrawn = records
        .iter()
        .filter(|r| withdrawn_before(r, plan.period.from).is_some())
        .count();
    let mut compared_with = compared_with;
    if withdrawn > 0 {
        summary.push_str(&match withdrawn {
            1 => " 1 of them withdrew consent before this period: listed for flags raised by their records up to then.".to_string(),
            n => format!(" {n} of them withdrew consent before this period: listed for flags raised by their records up to then."),
        });
        compared_with.push_str(
            " “Before withdrawal” marks a flag of someone who withdrew consent before this period: raised by their records up to that day (nothing later is read), so neither new nor continuing; it stays on the list so that it is not lost.",
        );
    }
    match unread {
        0 => {}
        1 => summary.push_str(" 1 participant has lab results that could not be read."),
        n => summary.push_str(&format!(
            " {n} participants have lab results that could not be read."
        )),
    }
    let mut rows = Vec::new();
    for r in records {
        let vals = values(r, plan);
        for it in &r.items {
            rows.push(vec![
                r.id.clone(),
                r.name.clone().unwrap_or_default(),
                status(it, r, plan.period.from),
                it.reason.clone(),
                vals.clone(),
                pretty_dates(&it.dates),
                it.details.clone(),
            ]);
        }
    }
    FollowupContext {
        program: ProgramView::new(plan),
        recipient,
        purpose: PURPOSE.into(),
        participants: records.len(),
        with_new,
        summary,
        compared_with,
        table: TableView {
            header: vec![
                "Participant".into(),
                "Name".into(),
                "Status".into(),
                "Reason".into(),
                "Values".into(),
                "Dates".into(),
                "Details".into(),
            ],
            rows,
        },
    }
}

/// The follow-up list as CSV: one row per flag, values in metric units with the unit in the
/// column name.
pub fn csv(plan: &Scope<'_>, records: &[FollowupRecord]) -> Result<Vec<u8>, RenderError> {
    // Through the guarded writer, as every CSV: a name from a profile can begin like a formula.
    let mut w = crate::csv_out::Writer::from_writer(Vec::new());
    let io = |e: csv::Error| RenderError::Template(format!("follow-up CSV: {e}"));
    w.write_record([
        "participant_id",
        "name",
        "period_from",
        "period_to",
        "flag",
        "status",
        "at_follow_up",
        "reason",
        "dates",
        "weight_kg",
        "bmi_kg_m2",
        "change_percent",
        "rate_kg_per_week",
        "logged_intake_kcal_per_day",
        "last_weigh_in",
        "left_program",
        "details",
    ])
    .map_err(io)?;
    let n = |x: Option<f64>, d: usize| x.map(|v| format!("{v:.d$}")).unwrap_or_default();
    for r in records {
        for it in &r.items {
            w.write_record([
                r.id.as_str(),
                r.name.as_deref().unwrap_or(""),
                &plan.period.from.to_string(),
                &plan.period.to.to_string(),
                &it.code,
                if it.code == LABS_NOT_READ {
                    "not_read"
                } else if withdrawn_before(r, plan.period.from).is_some() {
                    "before_withdrawal"
                } else if it.new {
                    "new"
                } else {
                    "continuing"
                },
                if it.at_follow_up { "yes" } else { "no" },
                &it.reason,
                &it.dates,
                &n(r.weight_kg, 1),
                &r.bmi.map(bmi_shown).unwrap_or_default(),
                &n(r.change_percent, 1),
                &n(r.rate_kg_per_week, 2),
                &n(r.logged_intake_kcal_per_day, 0),
                r.last_weigh_in.as_deref().unwrap_or(""),
                r.left_program.as_deref().unwrap_or(""),
                &it.details,
            ])
            .map_err(io)?;
        }
    }
    w.into_inner()
        .map_err(|e| RenderError::Template(format!("follow-up CSV: {e}")))
}

/// Renders the list: `(file name, bytes)` for `followup.html`, `followup.pdf` (as the
/// program's formats say) and always `followup.csv`.
pub fn render(
    plan: &Scope<'_>,
    templates: &TemplateSet,
    records: &[FollowupRecord],
    formats: &[Format],
) -> Result<Vec<(String, Vec<u8>)>, RenderError> {
    let ctx = context(plan, records);
    let mut out = Vec::new();
    let html = templates.render("followup.html", &ctx, serde_json::Map::new())?;
    for f in formats {
        match f {
            Format::Html => out.push(("followup.html".to_string(), html.clone().into_bytes())),
            Format::Pdf => out.push((
                "followup.pdf".to_string(),
                super::from_html::pdf(
                    &html,
                    &templates.source_of("followup.html"),
                    &std::collections::BTreeMap::new(),
                    super::from_html::Frame {
                        header: format!("{} · {}", ctx.program.title, ctx.program.period_label),
                        footer: format!("Private · for {}", ctx.recipient),
                        subject: format!("Clinician follow-up list, {}", ctx.program.title),
                        author: ctx.program.tool.clone(),
                        period_to: ctx.program.period_to.clone(),
                        id_seed: format!("{}/{}/followup", ctx.program.id, ctx.program.period_to),
                    },
                )?,
            )),
        }
    }
    out.push(("followup.csv".to_string(), csv(plan, records)?));
    Ok(out)
}

#[cfg(test)]
mod tests {
    #[test]
    fn the_opening_line_counts_in_words() {
        assert_eq!(
            super::summary_line(3, 0),
            "3 participants with a clinical flag this period; none of the flags is new."
        );
        assert_eq!(
            super::summary_line(3, 2),
            "3 participants with a clinical flag this period; 2 of them with a flag that is new."
        );
        assert_eq!(
            super::summary_line(1, 1),
            "1 participant with a clinical flag this period; a flag of theirs is new."
        );
        assert_eq!(
            super::summary_line(1, 0),
            "1 participant with a clinical flag this period; no flag of theirs is new."
        );
        assert_eq!(
            super::summary_line(0, 0),
            "No participant has a clinical flag this period."
        );
    }

    /// The reason column printed the default thresholds ("below 20", "about 1 kg (2 lb) a
    /// week", "about 800 kcal"), wrong for a program that sets its own; it names none now.
    #[test]
    fn reasons_name_no_threshold_a_program_can_change() {
        for code in [
            "fast_loss",
            "very_low_intake",
            "low_intake",
            "low_bmi",
            "fast_gain",
            "weigh_in_step",
            "medication_review",
            "below_resting_intake",
        ] {
            let r = super::reason(code);
            assert!(!r.chars().any(|c| c.is_ascii_digit()), "{code}: {r}");
        }
    }

    use super::*;

    fn d(s: &str) -> NaiveDate {
        s.parse().unwrap()
    }

    #[test]
    fn previous_period_is_the_month_before_or_the_same_length_before() {
        let start = d("2026-04-01");
        let sep = Period {
            from: d("2026-09-01"),
            to: d("2026-09-30"),
        };
        assert_eq!(
            previous_period(sep, start),
            Some(Period {
                from: d("2026-08-01"),
                to: d("2026-08-31")
            })
        );
        let apr = Period {
            from: d("2026-04-01"),
            to: d("2026-04-30"),
        };
        assert_eq!(previous_period(apr, start), None);
        // 13 months from January to January: the same length before, not December.
        let long = Period {
            from: d("2027-01-01"),
            to: d("2028-01-31"),
        };
        assert_eq!(
            previous_period(long, d("2025-01-01")),
            Some(Period {
                from: d("2025-12-01"),
                to: d("2026-12-31")
            })
        );
        let span = Period {
            from: d("2026-05-11"),
            to: d("2026-05-20"),
        };
        assert_eq!(
            previous_period(span, start),
            Some(Period {
                from: d("2026-05-01"),
                to: d("2026-05-10")
            })
        );
    }

    #[test]
    fn dates_are_found_in_messages() {
        assert_eq!(
            iso_dates("most recently 2026-08-01 to 2026-08-21: about 1.2 kg a week"),
            vec!["2026-08-01".to_string(), "2026-08-21".to_string()]
        );
        assert!(iso_dates("about 1150 kcal a day").is_empty());
        assert_eq!(
            iso_dates(
                "over every 21-day span from 2026-06-01 to 2026-11-27 (the last one, 2026-11-06 to 2026-11-27: about 1.6 kg"
            ),
            ["2026-06-01", "2026-11-27", "2026-11-06"]
        );
        // The low-BMI flag's own message: a 10-byte window ends inside "²".
        assert!(
            iso_dates(
                "Current BMI is about 17.0 kg/m², below 18.5, the lower limit of the normal range (WHO)."
            )
            .is_empty()
        );
        assert_eq!(
            iso_dates("BMI 17.0 kg/m² on 2026-07-31 (ü)"),
            vec!["2026-07-31".to_string()]
        );
    }
}

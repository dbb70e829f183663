//! `cohortpress check`: prints what loading found ([`crate::check`]), as text for people or
//! JSON Lines for scripts, and returns the exit code.

use crate::check::{CheckReport, check_program, plural};
use crate::diag::{self, Diagnostic, Severity};
use crate::exit_code;
use chrono::NaiveDate;
use std::io::Write;
use std::path::{Path, PathBuf};

/// The exit code a check report calls for (see [`exit_code::Outcome`]).
pub fn exit_code_of(report: &CheckReport) -> i32 {
    let left_out = report
        .participants
        .iter()
        .filter(|p| p.diagnostics.iter().any(|d| d.severity == Severity::Error))
        .count()
        + report
            .discovery
            .iter()
            .filter(|d| d.severity == Severity::Error)
            .count();
    let warnings = report
        .all_diagnostics()
        .filter(|d| d.severity == Severity::Warning)
        .count();
    exit_code::Outcome {
        program_invalid: report.program_invalid(),
        participants_left_out: left_out,
        output_unusable: report
            .ledger
            .iter()
            .chain(&report.templates)
            .chain(&report.output)
            .chain(&report.work_folder)
            .any(|d| d.severity == Severity::Error),
        module_failures: 0,
        warnings,
    }
    .exit_code()
}

/// How `check` prints, and the option it shares with `run`.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct CheckOptions {
    /// One JSON object per diagnostic (and per note) instead of text.
    pub json: bool,
    /// List clean participants and every diagnostic one by one.
    pub verbose: bool,
    /// `--state DIR`, as given to `run`: the group-report ledger folder to judge (default: the
    /// one a run without `--out` and `--state` uses).
    pub state: Option<PathBuf>,
    /// `--out DIR`, as given to `run`: without `--state`, the ledger of a run into that folder
    /// is the one judged.
    pub out: Option<PathBuf>,
}

/// Examples shown per kind in the summary.
const EXAMPLES_PER_KIND: usize = 3;
/// Kinds shown in the summary before "… more kinds" (so it fits a screen).
const KINDS_SHOWN: usize = 12;
/// Diagnostics of one kind shown in full per participant file before the rest are collapsed.
const SHOWN_PER_FILE_KIND: usize = 2;

/// What makes two diagnostics "the same kind": severity, the file name (not its folder), the
/// column, and the message with quoted values and numbers blanked out.
fn kind_of(d: &Diagnostic) -> (Severity, String) {
    let file = d.file.rsplit('/').next().unwrap_or(&d.file);
    let msg = d.message.split("; ").next().unwrap_or(&d.message);
    let mut masked = String::with_capacity(msg.len());
    let mut quoted = false;
    for c in msg.chars() {
        if c == '`' {
            if !quoted {
                masked.push_str("`…`");
            }
            quoted = !quoted;
        } else if quoted {
        } else if c.is_ascii_digit() {
            if !masked.ends_with('#') {
                masked.push('#');
            }
        } else if !(masked.ends_with('#') && (c == '.' || c == '-' || c == '–')) {
            masked.push(c);
        }
    }
    (d.severity, format!("{file}: {masked}"))
}

fn severity_word(s: Severity) -> &'static str {
    match s {
        Severity::Error => "error",
        Severity::Warning => "warning",
    }
}

/// Writes the human report: the totals and a summary by kind first (count, participants
/// affected, first examples with file:line:column), then how files were read, then the details
/// per participant with repeated causes collapsed (every diagnostic with `verbose`), then the
/// totals again.
pub fn write_report_with(
    report: &CheckReport,
    opts: &CheckOptions,
    out: &mut dyn Write,
) -> std::io::Result<()> {
    if opts.json {
        return write_json(report, out);
    }
    match &report.program {
        Err(diags) => {
            for d in diags {
                writeln!(out, "{d}")?;
            }
            let (e, _) = diag::count(diags);
            // A program folder that does not exist (or is not a folder) has no program.yaml to
            // be invalid: name what the errors are about.
            let what = if diags.iter().all(|d| d.file == "program.yaml") {
                "program.yaml is invalid"
            } else {
                "the program folder is invalid"
            };
            writeln!(
                out,
                "{what} ({e} error{}); nothing was checked further",
                plural(e)
            )?;
            return Ok(());
        }
        Ok(p) => writeln!(
            out,
            "program {} ({}): ok",
            diag::printable(&p.info.id),
            diag::printable(&p.info.title)
        )?,
    }
    writeln!(out, "{}", report.summary())?;

    // Summary by kind.
    struct Kind<'a> {
        count: usize,
        participants: std::collections::BTreeSet<&'a str>,
        examples: Vec<&'a Diagnostic>,
        // Whether every message of the kind is the first one's, word for word.
        same: bool,
    }
    let mut kinds: std::collections::BTreeMap<(Severity, String), Kind<'_>> =
        std::collections::BTreeMap::new();
    // The warnings of a participant that cannot be used are not listed by kind (without
    // `verbose`): an enrolment date after the program's end put 83 "before enrolment" warnings
    // of one person ahead of the one error that mattered and of everyone else's warnings. They
    // are counted in one line, and the participant's details give them per file.
    let unusable: std::collections::BTreeSet<&str> = report
        .participants
        .iter()
        .filter(|p| p.data.is_none())
        .map(|p| p.id.as_str())
        .collect();
    let folded = |d: &Diagnostic| {
        !opts.verbose
            && d.severity == Severity::Warning
            && d.participant
                .as_deref()
                .is_some_and(|p| unusable.contains(p))
    };
    let mut folded_count = 0;
    let mut folded_people: std::collections::BTreeSet<&str> = Default::default();
    for d in report.all_diagnostics() {
        if folded(d) {
            folded_count += 1;
            folded_people.extend(d.participant.as_deref());
            continue;
        }
        let k = kinds.entry(kind_of(d)).or_insert(Kind {
            count: 0,
            participants: Default::default(),
            examples: Vec::new(),
            same: true,
        });
        k.count += 1;
        k.same &= k.examples.first().is_none_or(|f| f.message == d.message);
        if let Some(p) = &d.participant {
            k.participants.insert(p);
        }
        if k.examples.len() < EXAMPLES_PER_KIND {
            k.examples.push(d);
        }
    }
    if !kinds.is_empty() || folded_count > 0 {
        let mut list: Vec<_> = kinds.into_iter().collect();
        // Errors first, then the most frequent.
        list.sort_by(|a, b| {
            (b.0.0, b.1.count)
                .cmp(&(a.0.0, a.1.count))
                .then(a.0.1.cmp(&b.0.1))
        });
        writeln!(out)?;
        writeln!(
            out,
            "summary by kind ({} kind{}):",
            list.len(),
            plural(list.len())
        )?;
        for ((sev, _), k) in list.iter().take(KINDS_SHOWN) {
            let first = k.examples[0];
            let who = match k.participants.len() {
                0 => String::new(),
                1 => ", 1 participant".to_string(),
                n => format!(", {n} participants"),
            };
            // A kind's messages may differ in their values (each participant's own enrolment
            // date): the first is then shown as an example, not as what all of them say ("date
            // 2026-06-01 is before enrolment (2026-06-03)" stood for one enrolled on 2 June too).
            let eg = if k.same { "" } else { " e.g." };
            writeln!(
                out,
                "  {} ×{}{who}:{eg} {}",
                severity_word(*sev),
                k.count,
                diag::printable(&first.message)
            )?;
            let at: Vec<String> = k
                .examples
                .iter()
                .map(|d| diag::printable(&d.location()).into_owned())
                .collect();
            let more = if k.count > at.len() { ", …" } else { "" };
            writeln!(out, "      at {}{more}", at.join(", "))?;
        }
        if list.len() > KINDS_SHOWN {
            let rest: usize = list[KINDS_SHOWN..].iter().map(|k| k.1.count).sum();
            let more = list.len() - KINDS_SHOWN;
            writeln!(
                out,
                "  … {more} more kind{} ({rest} diagnostic{}) in the details below",
                plural(more),
                plural(rest)
            )?;
        }
        if folded_count > 0 {
            let n = folded_people.len();
            let who: Vec<&str> = folded_people
                .iter()
                .take(EXAMPLES_PER_KIND)
                .copied()
                .collect();
            let etc = if n > who.len() { ", …" } else { "" };
            writeln!(
                out,
                "  warning ×{folded_count} in the files of {n} participant{} that cannot be used \
                 ({}{etc}): not listed here, as they matter once their errors are fixed \
                 (`check --verbose` lists them)",
                plural(n),
                who.join(", ")
            )?;
        }
    }

    // How files were read, collapsed by what was said.
    let mut notes: std::collections::BTreeMap<&str, Vec<&crate::participant::table::Note>> =
        std::collections::BTreeMap::new();
    for p in &report.participants {
        for n in &p.notes {
            notes.entry(n.message.as_str()).or_default().push(n);
        }
    }
    if !notes.is_empty() {
        writeln!(out)?;
        writeln!(out, "how files were read:")?;
        let mut list: Vec<_> = notes.into_iter().collect();
        list.sort_by(|a, b| b.1.len().cmp(&a.1.len()).then(a.0.cmp(b.0)));
        let shown = if opts.verbose {
            list.len()
        } else {
            KINDS_SHOWN
        };
        for (msg, ns) in list.iter().take(shown) {
            if ns.len() == 1 {
                writeln!(
                    out,
                    "  {}: {}",
                    diag::printable(&ns[0].file),
                    diag::printable(msg)
                )?;
            } else {
                let people: std::collections::BTreeSet<&str> =
                    ns.iter().map(|n| n.participant.as_str()).collect();
                writeln!(
                    out,
                    "  {} files of {} participant{}, e.g. {}: {}",
                    ns.len(),
                    people.len(),
                    plural(people.len()),
                    diag::printable(&ns[0].file),
                    diag::printable(msg)
                )?;
            }
        }
        if list.len() > shown {
            writeln!(
                out,
                "  … {} more (`check --verbose` lists them all)",
                list.len() - shown
            )?;
        }
    }

    // Details.
    if !report.discovery.is_empty() {
        writeln!(out)?;
        writeln!(out, "participants folder:")?;
        for d in &report.discovery {
            writeln!(out, "{d}")?;
        }
    }
    if !report.work_folder.is_empty() {
        writeln!(out)?;
        writeln!(out, "temporary folder for external modules:")?;
        for d in &report.work_folder {
            writeln!(out, "{d}")?;
        }
    }
    if !report.output.is_empty() {
        writeln!(out)?;
        writeln!(out, "output folder:")?;
        for d in &report.output {
            writeln!(out, "{d}")?;
        }
    }
    if !report.ledger.is_empty() {
        writeln!(out)?;
        writeln!(out, "group-report ledger:")?;
        for d in &report.ledger {
            writeln!(out, "{d}")?;
        }
    }
    if !report.templates.is_empty() {
        writeln!(out)?;
        writeln!(out, "report templates:")?;
        for d in &report.templates {
            writeln!(out, "{d}")?;
        }
    }
    let mut clean = 0;
    for p in &report.participants {
        let (e, w) = diag::count(&p.diagnostics);
        let status = if p.data.is_some() {
            "usable"
        } else {
            "not usable"
        };
        if e + w == 0 && p.data.is_some() && !opts.verbose {
            clean += 1;
            continue;
        }
        let mut counts = Vec::new();
        if e > 0 {
            counts.push(format!("{e} error{}", plural(e)));
        }
        if w > 0 {
            counts.push(format!("{w} warning{}", plural(w)));
        }
        let counts = if counts.is_empty() {
            String::new()
        } else {
            format!(" ({})", counts.join(", "))
        };
        writeln!(out)?;
        writeln!(out, "{}: {status}{counts}", diag::printable(&p.id))?;
        // Errors first: the one that makes a participant unusable is what to fix first, and it
        // came after every row warning of the files read before profile.yaml.
        let mut diags: Vec<&Diagnostic> = p.diagnostics.iter().collect();
        diags.sort_by_key(|d| d.severity != Severity::Error);
        if opts.verbose {
            for d in &diags {
                writeln!(out, "{d}")?;
            }
            for n in &p.notes {
                writeln!(
                    out,
                    "note: {}: {}",
                    diag::printable(&n.file),
                    diag::printable(&n.message)
                )?;
            }
            continue;
        }
        // Repeated causes in one file are collapsed after the first few.
        let mut seen: std::collections::BTreeMap<(Severity, String, &str), Vec<&Diagnostic>> =
            std::collections::BTreeMap::new();
        let mut order = Vec::new();
        // An unusable participant's warnings are summed up in one line after its errors.
        let unusable = p.data.is_none() && e > 0;
        let mut held: std::collections::BTreeMap<&str, usize> = Default::default();
        for d in diags {
            if unusable && d.severity == Severity::Warning {
                let file = d.file.rsplit('/').next().unwrap_or(&d.file);
                *held.entry(file).or_default() += 1;
                continue;
            }
            let (sev, k) = kind_of(d);
            let key = (sev, k, d.file.as_str());
            let list = seen.entry(key.clone()).or_default();
            if list.is_empty() {
                order.push(key);
            }
            list.push(d);
        }
        for key in &order {
            let list = &seen[key];
            for d in list.iter().take(SHOWN_PER_FILE_KIND) {
                writeln!(out, "{d}")?;
            }
            if list.len() > SHOWN_PER_FILE_KIND {
                let lines: Vec<String> = list[SHOWN_PER_FILE_KIND..]
                    .iter()
                    .take(10)
                    .filter_map(|d| d.line.map(|l| l.to_string()))
                    .collect();
                let rest = list.len() - SHOWN_PER_FILE_KIND;
                let etc = if rest > lines.len() { ", …" } else { "" };
                writeln!(
                    out,
                    "  … and {rest} more like this in {} (line{} {}{etc})",
                    diag::printable(key.2),
                    if lines.len() == 1 { "" } else { "s" },
                    lines.join(", ")
                )?;
            }
        }
        if !held.is_empty() {
            let per_file: Vec<String> = held.iter().map(|(f, n)| format!("{f} {n}")).collect();
            writeln!(
                out,
                "  … and {w} warning{} not listed ({}): the participant cannot be used until the \
                 error{} above {} fixed, and some warnings may follow from {}; `check --verbose` \
                 lists them",
                plural(w),
                diag::printable(&per_file.join(", ")),
                plural(e),
                if e == 1 { "is" } else { "are" },
                if e == 1 { "it" } else { "them" },
            )?;
        }
    }
    if clean > 0 {
        writeln!(out)?;
        writeln!(
            out,
            "{clean} participant{} with nothing to report (`check --verbose` lists them)",
            plural(clean)
        )?;
    }
    writeln!(out)?;
    writeln!(out, "{}", report.summary())
}

/// One JSON object per line for each diagnostic (`severity` `error` or `warning`) and each
/// note on how a file was read (`severity` `note`), in the order of the text report.
fn write_json(report: &CheckReport, out: &mut dyn Write) -> std::io::Result<()> {
    for d in report.all_diagnostics() {
        serde_json::to_writer(&mut *out, d)?;
        writeln!(out)?;
    }
    for p in &report.participants {
        for n in &p.notes {
            let v = serde_json::json!({
                "severity": "note",
                "participant": n.participant,
                "file": n.file,
                "message": n.message,
            });
            serde_json::to_writer(&mut *out, &v)?;
            writeln!(out)?;
        }
    }
    Ok(())
}

/// Writes the human report with the default options.
pub fn write_report(report: &CheckReport, out: &mut dyn Write) -> std::io::Result<()> {
    write_report_with(report, &CheckOptions::default(), out)
}

/// Runs the check on the program at `root` and prints the diagnostics to `out`; returns the
/// exit code (see [`crate::exit_code`]).
pub fn run_check(root: &Path, as_of: NaiveDate, out: &mut dyn Write) -> i32 {
    run_check_with(root, as_of, &CheckOptions::default(), out)
}

/// [`run_check`] with output options.
pub fn run_check_with(
    root: &Path,
    as_of: NaiveDate,
    opts: &CheckOptions,
    out: &mut dyn Write,
) -> i32 {
    let mut report = check_program(root, as_of);
    // The output folder — `--out` when given, else `report.out` — is checked as `run` would
    // check it (a foreign folder, the program folder, participants/…), so the same program
    // and folder give the same exit code from both. `check --out DIR` judged only the ledger
    // beside DIR: `check --out sample-program/participants` said nothing, and `run` with the
    // same --out refused (exit 2).
    if let Ok(prog) = &report.program {
        let (dir, named_by) = match opts.out.as_deref() {
            Some(o) if crate::run::plan::tilde_message("--out", Some(o)).is_none() => {
                (o.to_path_buf(), "--out")
            }
            _ => (prog.root.join(&prog.def.report.out), "report.out"),
        };
        let target = crate::run::plan::output_target(
            prog,
            dir,
            crate::output::OutputScope::Complete,
            named_by,
        );
        let refused = match target.check() {
            Err(crate::output::StagingError::Refused(m)) => Some(m),
            _ => None,
        };
        if let Some(m) = refused.as_ref().filter(|_| named_by == "--out") {
            // A wrong command line, as `run` takes it (exit 2).
            let d = Diagnostic::error("command line", m.clone());
            let written = if opts.json {
                serde_json::to_writer(&mut *out, &d)
                    .map_err(std::io::Error::from)
                    .and_then(|()| writeln!(out))
            } else {
                writeln!(out, "{d}")
            };
            return match written {
                Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => exit_code::OUTPUT_FAILED,
                _ => exit_code::USAGE,
            };
        }
        // Loaded once, for both the check that they can be used and the check of what they
        // print (`template_problems`).
        let templates = if refused.is_none() {
            Some(crate::report::templates::load_checked(prog))
        } else {
            None
        };
        if let Some(m) = refused {
            let mut d = Diagnostic::error("program.yaml", m).field("report.out");
            if let Some((line, col)) =
                crate::program::load::key_position_in_file(&prog.root, "report.out")
            {
                d = d.at(line, col);
            }
            report.program = Err(vec![d]);
            report.participants.clear();
            report.discovery.clear();
        } else if let Some(Err(d)) = &templates {
            // The report templates of the program's own (`report.templates`) are loaded as a
            // run loads them before it starts: a template that does not parse, a partial loop,
            // a link or code in a template stopped every run of a program `check` had passed.
            report.program = Err(vec![d.clone()]);
            report.participants.clear();
            report.discovery.clear();
        } else if let Some(Ok(templates)) = &templates {
            if let Some((folder, e)) = target.write_problem() {
                report.output.push(
                    Diagnostic::error(
                        folder.display().to_string(),
                        format!(
                            "the output folder ({named_by}) cannot be written here ({e}); a run \
                             writes its lock file, staging folder and new output in this folder, \
                             so it would stop with exit code 6"
                        ),
                    )
                    .hint(format!(
                        "name an output folder this run can write with {}",
                        if named_by == "--out" {
                            "--out"
                        } else {
                            "--out (or report.out)"
                        }
                    )),
                );
            }
            report.templates = template_problems(prog, templates, &report.participants, as_of);
            match ledger_problems(prog, opts.state.as_deref(), opts.out.as_deref()) {
                Ok(diags) => report.ledger = diags,
                // `--state` refused as `run` refuses it: a wrong command line (exit 2).
                Err(m) => {
                    let d = Diagnostic::error("command line", m);
                    let written = if opts.json {
                        serde_json::to_writer(&mut *out, &d)
                            .map_err(std::io::Error::from)
                            .and_then(|()| writeln!(out))
                    } else {
                        writeln!(out, "{d}")
                    };
                    return match written {
                        Err(e) if e.kind() != std::io::ErrorKind::BrokenPipe => {
                            exit_code::OUTPUT_FAILED
                        }
                        _ => exit_code::USAGE,
                    };
                }
            }
        }
    }
    match write_report_with(&report, opts, out) {
        Ok(()) => exit_code_of(&report),
        // The reader stopped early (`cohortpress check … | head`): what was checked is unchanged,
        // so the code says what the inputs are, as other Unix filters do on a closed pipe.
        Err(e) if e.kind() == std::io::ErrorKind::BrokenPipe => exit_code_of(&report),
        Err(_) => exit_code::OUTPUT_FAILED,
    }
}

/// What a run finds wrong on a page the program's own templates make, found as the run finds
/// it: a participant page that cannot be made, or a participant page or the group report's page
/// without the cautions ([`crate::report::check_template_cautions`], the check every run makes
/// before it publishes), reported in the run's words. A run stopped on it with exit code 6
/// while `check` had passed the program. The participant page is made for the first usable
/// participant, with its module results, in the period a run without `--period` reports.
fn template_problems(
    prog: &crate::program::Program,
    templates: &crate::report::templates::TemplateSet,
    participants: &[crate::participant::LoadedParticipant],
    as_of: chrono::NaiveDate,
) -> Vec<Diagnostic> {
    let data = participants.iter().find_map(|p| p.data.as_ref());
    let Ok((modules, _)) = crate::modules::build_module_set(prog) else {
        return Vec::new();
    };
    let Ok(period) =
        crate::run::plan::resolve_period(prog, as_of, &crate::run::plan::RunOptions::default())
    else {
        return Vec::new();
    };
    let scope = crate::report::Scope {
        program: prog,
        modules: &modules,
        period,
        as_of,
    };
    // The run's words: `RunError::Render` of the same error.
    let message = match crate::report::check_template_cautions(templates, &scope, data) {
        Ok(()) => return Vec::new(),
        Err(crate::report::CautionsMissing::Participant(e)) => {
            let id = data.map(|d| d.profile.id.as_str()).unwrap_or_default();
            crate::run::RunError::Render(format!("participant {id}: {e}"))
        }
        Err(crate::report::CautionsMissing::Group(e)) => {
            crate::run::RunError::Render(e.to_string())
        }
    };
    vec![
        Diagnostic::error("program.yaml", message.to_string())
            .field("report.templates")
            .hint("`run` stops on this template with exit code 6 and publishes nothing"),
    ]
}

/// The group-report ledger folder a run of this program would use — found as `run` finds it
/// ([`crate::group::ledger::resolve_dir`], with `--state` when given, else as a run with the
/// same `--out`, or without one: `report.state_dir`, else the ledger that exists, else the
/// program's new one beside `report.out`) — judged as a run judges it when it starts
/// ([`crate::group::ledger::Ledger::folder_problem_of`]): a run stops on such a
/// folder with exit code 6 before computing anything, after `check` had passed the program.
/// `Err` (the message) when `--state` itself is refused (as `run` refuses it, a usage error).
fn ledger_problems(
    prog: &crate::program::Program,
    state: Option<&Path>,
    out: Option<&Path>,
) -> Result<Vec<Diagnostic>, String> {
    if let Some(m) = crate::run::plan::tilde_message("--state", state)
        .or_else(|| crate::run::plan::tilde_message("--out", out))
    {
        return Err(m);
    }
    let out_dir = match out {
        Some(o) => o.to_path_buf(),
        None => prog.root.join(&prog.def.report.out),
    };
    let (dir, source) = crate::group::ledger::resolve_dir(state, prog, &out_dir, true)?;
    let problem = crate::group::ledger::Ledger::folder_problem_of(&dir, source);
    Ok(match problem {
        // A ledger that does not record the program's earlier group reports: `run` refuses
        // it without --new-ledger (a warning here: that option is the user's to give).
        Ok(()) => crate::run::plan::lost_ledger(&dir, state.is_some(), prog, &out_dir)
            .map(|why| {
                Diagnostic::warning(dir.display().to_string(), format!("group-report ledger: {why}"))
                    .hint("`run` refuses this with exit code 2 before computing anything, unless given --new-ledger")
            })
            .into_iter()
            .collect(),
        Err(p) => vec![
            Diagnostic::error(
                p.path.display().to_string(),
                format!("group-report ledger: {}", p.why),
            )
            .hint(
                "`run` stops on this ledger folder with exit code 6 before computing \
                     anything",
            ),
        ],
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::fs;

    fn as_of() -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, 12, 1).unwrap()
    }

    fn program_dir() -> tempfile::TempDir {
        let tmp = tempfile::tempdir().unwrap();
        fs::write(
            tmp.path().join("program.yaml"),
            "format_version: 1\nprogram: { id: demo-2026, title: Demo, start: 2026-04-01, end: 2026-09-30 }\nmodules: [ {id: trend} ]\n",
        )
        .unwrap();
        tmp
    }

    fn add(root: &Path, id: &str, files: &[(&str, &str)]) {
        let dir = root.join("participants").join(id);
        fs::create_dir_all(&dir).unwrap();
        for (n, t) in files {
            fs::write(dir.join(n), t).unwrap();
        }
    }

    fn profile(id: &str) -> String {
        format!("id: {id}\nsex: female\nage: 40\nheight: 165 cm\nenrolled: 2026-04-01\n")
    }

    fn run(root: &Path) -> (i32, String) {
        let mut out = Vec::new();
        let code = run_check(root, as_of(), &mut out);
        (code, String::from_utf8(out).unwrap())
    }

    #[test]
    fn clean_program_exits_zero() {
        let tmp = program_dir();
        add(tmp.path(), "P1", &[("profile.yaml", &profile("P1"))]);
        add(
            tmp.path(),
            "P2",
            &[
                ("profile.yaml", &profile("P2")),
                ("weights.csv", "date,weight,unit\n2026-04-02,80,kg\n"),
            ],
        );
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::SUCCESS, "{out}");
        // Clean participants are counted, not listed, unless asked for.
        assert!(!out.contains("P1: usable"), "{out}");
        assert!(
            out.contains("2 participants with nothing to report"),
            "{out}"
        );
        let mut verbose = Vec::new();
        let opts = CheckOptions {
            json: false,
            verbose: true,
            ..Default::default()
        };
        run_check_with(tmp.path(), as_of(), &opts, &mut verbose);
        assert!(String::from_utf8(verbose).unwrap().contains("P1: usable\n"));
        assert!(
            out.ends_with("checked 2 participants: 2 usable, 0 not usable; 0 errors, 0 warnings\n"),
            "{out}"
        );
    }

    /// Two participants enrolled on different days, each with a row before it: one kind in the
    /// summary, whose line printed the first one's enrolment date as if it were both's.
    #[test]
    fn a_summary_kind_whose_messages_differ_shows_its_first_as_an_example() {
        let tmp = program_dir();
        for (id, enrolled) in [("P1", "2026-04-03"), ("P2", "2026-04-02")] {
            add(
                tmp.path(),
                id,
                &[
                    ("profile.yaml", &profile(id).replace("2026-04-01", enrolled)),
                    (
                        "weights.csv",
                        "date,weight,unit\n2026-04-01,80,kg\n2026-04-05,80,kg\n",
                    ),
                ],
            );
        }
        let (_, out) = run(tmp.path());
        assert!(
            out.contains(
                "  warning ×2, 2 participants: e.g. date 2026-04-01 is before enrolment (2026-04-03); the row is dropped\n"
            ),
            "{out}"
        );
        // Messages that are the same word for word are not called an example.
        add(
            tmp.path(),
            "P2",
            &[(
                "profile.yaml",
                &profile("P2").replace("2026-04-01", "2026-04-03"),
            )],
        );
        let (_, out) = run(tmp.path());
        assert!(
            out.contains(
                "  warning ×2, 2 participants: date 2026-04-01 is before enrolment (2026-04-03); the row is dropped\n"
            ),
            "{out}"
        );
    }

    /// A wellness lead's first `check`: one file without its `unit` column (the participant is
    /// still usable) ended "checked 6 participants: 6 usable, 0 with errors; 1 error", which
    /// reads as a contradiction. The count is of participants left out, and says so.
    #[test]
    fn the_last_line_counts_participants_left_out_not_participants_with_errors() {
        let tmp = program_dir();
        add(
            tmp.path(),
            "P1",
            &[
                ("profile.yaml", &profile("P1")),
                ("weights.csv", "date,weight\n2026-04-02,80\n"),
            ],
        );
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PARTICIPANT_ERRORS, "{out}");
        assert!(out.contains("P1: usable (1 error)"), "{out}");
        assert!(
            out.ends_with("checked 1 participant: 1 usable, 0 not usable; 1 error, 0 warnings\n"),
            "{out}"
        );
    }

    #[test]
    fn warnings_and_errors_set_the_exit_code() {
        let tmp = program_dir();
        add(
            tmp.path(),
            "P1",
            &[
                ("profile.yaml", &profile("P1")),
                ("weights.csv", "date,weight,unit\n2027-04-02,80,kg\n"),
            ],
        );
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::WARNINGS, "{out}");
        assert!(out.contains("P1: usable (1 warning)"), "{out}");
        add(tmp.path(), "P0", &[("weights.csv", "date,weight,unit\n")]);
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PARTICIPANT_ERRORS, "{out}");
        assert!(out.contains("P0: not usable (1 error)"), "{out}");
        // Participants are reported in folder order.
        assert!(out.find("P0:").unwrap() < out.find("P1:").unwrap());
        assert!(
            out.contains("checked 2 participants: 1 usable, 1 not usable; 1 error, 1 warning"),
            "{out}"
        );
        let report = check_program(tmp.path(), as_of());
        assert_eq!(report.usable(), 1);
        assert_eq!(report.counts(), (1, 1));
    }

    #[test]
    fn the_summary_collapses_repeated_causes_and_json_has_one_object_per_diagnostic() {
        let tmp = program_dir();
        // 30 participants, each with the same two kinds of problem and a semicolon file.
        for i in 0..30 {
            let id = format!("P{i:02}");
            add(
                tmp.path(),
                &id,
                &[
                    ("profile.yaml", &profile(&id)),
                    (
                        "weights.csv",
                        "date;weight;unit\n2026-04-02;80,5;kg\n2026-04-03;x;kg\n2026-04-04;y;kg\n2026-04-05;z;kg\n",
                    ),
                    ("intake.csv", "2026-04-02,1800\n"),
                ],
            );
        }
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PARTICIPANT_ERRORS, "{out}");
        let summary_at = out.find("summary by kind (2 kinds):").expect(&out);
        let details_at = out.find("\nP00: usable").expect(&out);
        assert!(summary_at < details_at, "{out}");
        assert!(
            out.contains("  error ×30, 30 participants: no header row: missing required columns `date`, `kcal`; the file is not used\n      at participants/P00/intake.csv:1, participants/P01/intake.csv:1, participants/P02/intake.csv:1, …\n"),
            "{out}"
        );
        assert!(
            out.contains("  warning ×90, 30 participants: not a number in `weight`"),
            "{out}"
        );
        assert!(
            out.contains("  30 files of 30 participants, e.g. participants/P00/weights.csv: read as semicolon-separated with decimal commas\n"),
            "{out}"
        );
        // Within a participant the third like problem is collapsed.
        assert!(
            out.contains("  … and 1 more like this in participants/P00/weights.csv (line 5)"),
            "{out}"
        );
        // The summary part fits a screen.
        assert!(out[..details_at].lines().count() < 25, "{out}");

        let mut json = Vec::new();
        let opts = CheckOptions {
            json: true,
            verbose: false,
            ..Default::default()
        };
        run_check_with(tmp.path(), as_of(), &opts, &mut json);
        let lines: Vec<serde_json::Value> = String::from_utf8(json)
            .unwrap()
            .lines()
            .map(|l| serde_json::from_str(l).unwrap())
            .collect();
        assert_eq!(lines.len(), 30 * 3 + 30 + 30);
        let e = lines.iter().find(|v| v["severity"] == "error").unwrap();
        assert_eq!(e["file"], "participants/P00/intake.csv");
        assert_eq!(e["line"], 1);
        assert_eq!(lines.iter().filter(|v| v["severity"] == "note").count(), 30);
    }

    /// A program of one participant, P1, whose `report.templates` is its empty `templates/`
    /// folder (returned beside the program's).
    fn program_with_own_templates() -> (tempfile::TempDir, std::path::PathBuf) {
        let tmp = program_dir();
        add(tmp.path(), "P1", &[("profile.yaml", &profile("P1"))]);
        let yaml = tmp.path().join("program.yaml");
        let mut text = fs::read_to_string(&yaml).unwrap();
        text.push_str("report: { templates: templates }\n");
        fs::write(&yaml, text).unwrap();
        let t = tmp.path().join("templates");
        fs::create_dir(&t).unwrap();
        (tmp, t)
    }

    /// A template of the program's own that cannot be loaded stopped every run (exit 6, "rendering
    /// failed") while `check` said "program … ok" and exited 0: the templates are now loaded as
    /// the run loads them.
    #[test]
    fn a_template_the_run_cannot_load_is_an_error_of_check() {
        let (tmp, t) = program_with_own_templates();
        // A dumped template, edited: clean, then with an unclosed block, then with a script.
        // (Clean means with the cautions: without them a run stops too, and so does `check`.)
        fs::write(
            t.join("participant.html.hbs"),
            "<p>{{participant.id}}</p>\n",
        )
        .unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::OUTPUT_FAILED, "{out}");
        assert!(out.contains("does not show the cautions"), "{out}");
        fs::write(
            t.join("participant.html.hbs"),
            "<p>{{participant.id}}</p>\n{{> cautions}}\n",
        )
        .unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::SUCCESS, "{out}");
        fs::write(
            t.join("participant.html.hbs"),
            "<p>\n{{#if participant.id}}open\n",
        )
        .unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PROGRAM_INVALID, "{out}");
        assert!(
            out.contains("a report template of report.templates cannot be used"),
            "{out}"
        );
        assert!(out.contains("participant.html.hbs"), "{out}");
        fs::write(
            t.join("participant.html.hbs"),
            "<p>x</p>\n<script>1</script>\n",
        )
        .unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PROGRAM_INVALID, "{out}");
        assert!(out.contains("participant.html.hbs:2:1:"), "{out}");
        assert!(out.contains("`<script>`"), "{out}");
    }

    /// A template of the program's own with a misspelt field or a partial that does not exist
    /// loads, and its page cannot be made: the run stopped on the first participant ("rendering
    /// failed: participant P1: … Failed to access variable in strict mode", exit 6) while
    /// `check` said "program … ok" and exited 0 (attack22), as its page was made without the
    /// module results and any failure passed over. The page is now made as the run makes it.
    #[test]
    fn a_template_page_the_run_cannot_make_is_an_error_of_check() {
        let (tmp, t) = program_with_own_templates();
        for (page, found) in [
            (
                "<p>{{participant.idd}}</p>\n{{> cautions}}\n",
                "Failed to access variable in strict mode Some(\"participant.idd\")",
            ),
            (
                "<p>{{participant.id}}</p>\n{{> caution}}\n",
                "Partial not found caution",
            ),
        ] {
            fs::write(t.join("participant.html.hbs"), page).unwrap();
            let (code, out) = run(tmp.path());
            assert_eq!(code, exit_code::OUTPUT_FAILED, "{out}");
            assert!(
                out.contains("rendering failed: participant P1: template:"),
                "{out}"
            );
            assert!(out.contains(found), "{out}");
        }
        // The group page: a partial that does not exist is the run's failure too.
        fs::write(
            t.join("participant.html.hbs"),
            "<p>{{participant.id}}</p>\n{{> cautions}}\n",
        )
        .unwrap();
        fs::write(
            t.join("group.html.hbs"),
            "<p>x</p>\n{{> cautions}}{{> summary}}\n",
        )
        .unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::OUTPUT_FAILED, "{out}");
        assert!(out.contains("Partial not found summary"), "{out}");
        fs::remove_file(t.join("group.html.hbs")).unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::SUCCESS, "{out}");
    }

    #[test]
    fn invalid_program_or_missing_folder_exits_three() {
        let tmp = program_dir();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PROGRAM_INVALID, "{out}");
        assert!(out.contains("participants folder does not exist"), "{out}");
        fs::write(tmp.path().join("program.yaml"), "format_version: 1\n").unwrap();
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PROGRAM_INVALID);
        assert!(out.contains("missing field `program`"), "{out}");
        assert!(out.contains("program.yaml is invalid"), "{out}");
    }

    /// `check` of a folder that does not exist said "program.yaml is invalid (1 error)" under
    /// "the program folder does not exist"; and one kind of problem was "(1 kinds)".
    #[test]
    fn a_missing_program_folder_is_not_called_an_invalid_program_yaml() {
        let tmp = tempfile::tempdir().unwrap();
        let (code, out) = run(&tmp.path().join("no-such-program"));
        assert_eq!(code, exit_code::PROGRAM_INVALID, "{out}");
        assert!(out.contains("the program folder does not exist"), "{out}");
        assert!(
            out.contains("the program folder is invalid (1 error); nothing was checked further"),
            "{out}"
        );
        assert!(!out.contains("program.yaml is invalid"), "{out}");

        let tmp = program_dir();
        fs::remove_dir(tmp.path().join("participants")).ok();
        let (_, out) = run(tmp.path());
        assert!(out.contains("summary by kind (1 kind):"), "{out}");
    }

    /// A participant enrolled after the program's end had every row of every file dropped as
    /// "before enrolment": `check` printed 83 such warnings, by kind and then in the details,
    /// before the one error that made the participant unusable. (Their files are now read
    /// without that enrolment date; a row that cannot be read is still a warning.)
    #[test]
    fn an_unusable_participant_shows_its_error_first_and_its_warnings_in_one_line() {
        let tmp = program_dir();
        let late = profile("P1").replace("enrolled: 2026-04-01", "enrolled: 2026-11-02");
        let mut weights = String::from("date,weight,unit\n");
        for d in 1..=25 {
            weights.push_str(&format!("2026-05-{d:02},80,kg\n"));
        }
        weights.push_str("2026-05-26,x,kg\n");
        add(
            tmp.path(),
            "P1",
            &[
                ("profile.yaml", &late),
                ("weights.csv", &weights),
                (
                    "intake.csv",
                    "date,kcal\n2026-05-01,1800\n2026-05-02,1900\n2026-05-03,many\n",
                ),
            ],
        );
        add(
            tmp.path(),
            "P2",
            &[
                ("profile.yaml", &profile("P2")),
                (
                    "weights.csv",
                    "date,weight,unit\n2026-04-02,80,kg\n2026-04-03,x,kg\n",
                ),
            ],
        );
        let (code, out) = run(tmp.path());
        assert_eq!(code, exit_code::PARTICIPANT_ERRORS, "{out}");
        // One warning per file: a weight and an intake that are not numbers.
        assert!(
            out.contains("checked 2 participants: 1 usable, 1 not usable; 1 error, 3 warnings"),
            "{out}"
        );
        // The summary: the error, the other participant's warning, then one line for P1's.
        assert!(out.contains("summary by kind (2 kinds):\n  error ×1, 1 participant: enrolment date 2026-11-02 is after the program ends (2026-09-30); the participant cannot be used\n      at participants/P1/profile.yaml:5:11\n  warning ×1, 1 participant: not a number in `weight`"), "{out}");
        assert!(
            out.contains("  warning ×2 in the files of 1 participant that cannot be used (P1): not listed here, as they matter once their errors are fixed (`check --verbose` lists them)\n"),
            "{out}"
        );
        // The details: the error first, the warnings in one line per participant.
        assert!(
            out.contains("\nP1: not usable (1 error, 2 warnings)\nerror: participants/P1/profile.yaml:5:11: enrolment date"),
            "{out}"
        );
        assert!(
            out.contains("  … and 2 warnings not listed (intake.csv 1, weights.csv 1): the participant cannot be used until the error above is fixed, and some warnings may follow from it; `check --verbose` lists them\n"),
            "{out}"
        );
        assert!(!out.contains("dated before enrolment"), "{out}");
        // The usable participant's warning is still given in full.
        assert!(
            out.contains("warning: participants/P2/weights.csv:3:2: not a number in `weight`"),
            "{out}"
        );

        // --verbose lists everything, the error first.
        let mut verbose = Vec::new();
        let opts = CheckOptions {
            json: false,
            verbose: true,
            ..Default::default()
        };
        run_check_with(tmp.path(), as_of(), &opts, &mut verbose);
        let verbose = String::from_utf8(verbose).unwrap();
        let p1 = &verbose[verbose.find("\nP1: not usable").expect(&verbose)..];
        let error_at = p1.find("error: participants/P1/profile.yaml:5").unwrap();
        let first_warning = p1.find("warning: participants/P1/").unwrap();
        assert!(error_at < first_warning, "{verbose}");
        assert_eq!(
            p1.matches("warning: participants/P1/").count(),
            2,
            "{verbose}"
        );
        // The files are not read against the enrolment date that makes the profile unusable.
        assert!(!verbose.contains("before enrolment"), "{verbose}");
    }
}

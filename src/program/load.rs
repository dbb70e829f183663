//! Reading `program.yaml` and its semantic checks.
//!
//! Parsing (serde, unknown keys refused) stops at the first syntax or type problem, because the
//! YAML crate does; every *semantic* problem after that is collected, so a user fixes them all in
//! one pass. Module ids and their `with:` settings are checked by [`crate::modules`], not here.

use super::{FORMAT_VERSION, Program, ProgramDef};
use crate::diag::Diagnostic;
use chrono::NaiveDate;
use cohortpress_metric_api::{ProgramInfo, Targets};
use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// The program file's name, relative to the program folder (as diagnostics show it).
pub const PROGRAM_FILE: &str = "program.yaml";

/// Loads and checks `ROOT/program.yaml`. Every problem found is returned, not only the first.
pub fn load_program(root: &Path) -> Result<Program, Vec<Diagnostic>> {
    if !root.is_dir() {
        return Err(vec![
            Diagnostic::error(
                root.display().to_string(),
                "the program folder does not exist",
            )
            .expected("a folder holding program.yaml and participants/")
            .hint("give the path of the program folder"),
        ]);
    }
    let path = root.join(PROGRAM_FILE);
    let bytes = read_bytes(&path).map_err(|e| {
        let mut d = match crate::limits::NotAFile::of(&e) {
            Some(n) => Diagnostic::error(
                PROGRAM_FILE,
                format!("cannot read the program file: {}", n.sentence()),
            )
            .expected("a regular file")
            .found(n.found)
            .hint(crate::limits::NotAFile::HINT),
            None => Diagnostic::error(PROGRAM_FILE, format!("cannot read the program file ({e})")),
        };
        if e.kind() == std::io::ErrorKind::NotFound {
            d = d.hint("create program.yaml in the program folder (see the sample program)");
        }
        vec![d]
    })?;
    let text = decode_program(&bytes).map_err(|d| vec![d])?;
    parse_program(root, &text)
}

/// The text of `program.yaml`: UTF-8, or UTF-16 by the rule every input file is read with
/// ([`crate::encoding::decode_utf16`]: with a byte-order mark, or without one when its bytes
/// show it). A `profile.yaml` saved as UTF-16 was read while a `program.yaml` saved the same
/// way was refused ("the file is UTF-16 text; this file is read as UTF-8 only").
// A Diagnostic is the error on purpose (it is what the user sees); it is built rarely.
#[allow(clippy::result_large_err)]
pub fn decode_program(bytes: &[u8]) -> Result<std::borrow::Cow<'_, str>, Diagnostic> {
    match crate::encoding::decode_utf16(bytes) {
        Some(Ok((text, _))) => Ok(std::borrow::Cow::Owned(text)),
        Some(Err(why)) => Err(Diagnostic::error(
            PROGRAM_FILE,
            format!("{why}; the file is not used"),
        )
        .at(1, Some(1))
        .expected("UTF-8 or UTF-16 text")
        .hint(UTF8_HINT)),
        None => decode_utf8(bytes, PROGRAM_FILE).map(std::borrow::Cow::Borrowed),
    }
}

/// Parses and checks the text of a program file; `root` is used to resolve relative folders.
pub fn parse_program(root: &Path, text: &str) -> Result<Program, Vec<Diagnostic>> {
    let def: ProgramDef = crate::yaml::from_str(text, PROGRAM_FILE).map_err(|d| vec![d])?;
    let diags = validate_program(root, &def, text);
    if !diags.is_empty() {
        return Err(diags);
    }
    let info = ProgramInfo {
        id: def.program.id.clone(),
        title: def.program.title.clone(),
        start: def.program.start,
        end: def.program.end,
        units: def.units,
        targets: def.targets.apply(&Targets::default()),
    };
    let module_lines = module_lines(text, def.modules.len());
    let underweight_line = key_line(text, "guidance.underweight_bmi_below");
    Ok(Program {
        root: root.to_path_buf(),
        def,
        info,
        module_lines,
        underweight_line,
        source: text.to_string(),
    })
}

/// Why `path` cannot be meant as written, if it starts with `~` (`~`, `~/reports`, `~ana/x`):
/// a shell's word for a home folder, which nothing here expands, so it would name a folder
/// called `~` (relative to the program folder, or to the working folder on the command line).
pub fn tilde_problem(path: &Path) -> Option<String> {
    let first = path.components().next()?;
    first
        .as_os_str()
        .to_string_lossy()
        .starts_with('~')
        .then(|| {
            "the path starts with `~`, which is not read as the home folder here: it would be a \
             folder named `~`"
                .to_string()
        })
}

/// A path with `.` and `..` resolved lexically (the folder may not exist yet).
pub fn lexical(path: &Path) -> PathBuf {
    use std::path::Component;
    let mut out = PathBuf::new();
    for c in path.components() {
        match c {
            Component::CurDir => {}
            Component::ParentDir => {
                if !out.pop() {
                    out.push("..");
                }
            }
            other => out.push(other.as_os_str()),
        }
    }
    out
}

/// Why a ledger (state) folder is not allowed where it is, if it is not: inside the program's
/// inputs (`participants/`, the templates folder), the program folder itself, or inside the
/// output folder (replaced by every run). `state`, `templates` and `out` are relative to
/// `root` or absolute.
pub fn state_dir_problem(
    root: &Path,
    state: &Path,
    templates: Option<&Path>,
    out: &Path,
) -> Option<String> {
    lexical_state_problem(root, state, templates, out).or_else(|| {
        // The same once every link is resolved: a state folder reached through a link (or
        // inside a `participants/` that is itself a link) is refused like one named directly.
        let root = real_path(root);
        let state = real_path(&root.join(state));
        let templates = templates.map(|t| real_path(&root.join(t)));
        let out = real_path(&root.join(out));
        if state.starts_with(real_path(&root.join("participants"))) {
            return Some("inside participants/, among the inputs (through a link)".into());
        }
        lexical_state_problem(&root, &state, templates.as_deref(), &out)
            .map(|why| format!("{why} (through a link)"))
    })
}

/// `path` with every link resolved as the system resolves it: the longest leading part of it
/// that exists, canonicalized, plus the names that do not exist yet (their `.` and `..`
/// resolved lexically: folders still to be made are no links). A `..` is resolved where it
/// stands, after the links before it: `LINK/../x`, with LINK a link to
/// `participants/SG-003`, is `participants/x` (resolved lexically first, it read as a folder
/// beside the link, and the ledger was made in `participants/`).
fn real_path(path: &Path) -> PathBuf {
    let components: Vec<_> = path.components().collect();
    for at in (1..=components.len()).rev() {
        let existing: PathBuf = components[..at].iter().collect();
        if let Ok(real) = std::fs::canonicalize(&existing) {
            let rest: PathBuf = components[at..].iter().collect();
            return lexical(&real.join(rest));
        }
    }
    lexical(path)
}

/// [`state_dir_problem`] on the paths as written.
fn lexical_state_problem(
    root: &Path,
    state: &Path,
    templates: Option<&Path>,
    out: &Path,
) -> Option<String> {
    let state = lexical(&root.join(state));
    let inside = |dir: &Path| state.starts_with(lexical(&root.join(dir)));
    if inside(Path::new("participants")) {
        Some("inside participants/, among the inputs".into())
    } else if templates.is_some_and(inside) {
        Some("inside the templates folder, among the inputs".into())
    } else if state == lexical(root) {
        Some("the program folder itself".into())
    } else if inside(out) {
        Some("inside the output folder, which every run replaces".into())
    } else if lexical(&root.join(out)).starts_with(&state) {
        // `--out reports.ledger/x`: the run staged its output in the ledger folder, and the
        // lock file it left there made every later run refuse the ledger (exit 6).
        Some(
            "around the output folder: the output would be written inside the ledger folder, \
             which holds the ledger's files only; name an output folder outside it"
                .into(),
        )
    } else {
        None
    }
}

/// The smallest `privacy.min_cell_size` accepted (see [`validate_program`]).
pub const MIN_CELL_FLOOR: u32 = 3;

/// Semantic checks on a parsed program; returns every problem found.
pub fn validate_program(root: &Path, def: &ProgramDef, text: &str) -> Vec<Diagnostic> {
    let mut out = Vec::new();
    // At the key's value: line and column (these messages gave the line alone).
    let err = |key: &str, msg: String| {
        let mut d = Diagnostic::error(PROGRAM_FILE, msg).field(key);
        if let Some((l, c)) = key_position(text, key) {
            d = d.at(l, c);
        }
        d
    };
    if def.format_version != FORMAT_VERSION {
        out.push(
            err("format_version", "unsupported format version".into())
                .expected(FORMAT_VERSION.to_string())
                .found(def.format_version.to_string())
                .hint("this build of cohortpress reads format version 1"),
        );
    }
    let id = &def.program.id;
    if !is_plain_id(id) {
        out.push(
            err("program.id", "the program id is not a plain name".into())
                .expected("letters, digits, `-` and `_` only")
                .found(format!("`{id}`"))
                .hint("the id names output files; use e.g. `wellness-2026`"),
        );
    }
    if def.program.title.trim().is_empty() {
        out.push(err("program.title", "the program title is empty".into()));
    }
    if def.program.start >= def.program.end {
        // A program of one day (end = start) was told it "ends before it starts".
        let message = if def.program.start == def.program.end {
            "the program ends on the day it starts; a program runs for two days or more"
        } else {
            "the program ends before it starts"
        };
        out.push(
            err("program.end", message.into())
                .expected(format!("an end date after the start {}", def.program.start))
                .found(def.program.end.to_string()),
        );
    } else if (def.program.end - def.program.start).num_days() > crate::limits::MAX_PROGRAM_DAYS {
        let days = (def.program.end - def.program.start).num_days();
        let last = def.program.start + chrono::Duration::days(crate::limits::MAX_PROGRAM_DAYS);
        let mut d = Diagnostic::error(
            PROGRAM_FILE,
            format!(
                "the program runs {days} days (about {:.0} years), longer than the limit of {} \
                 days (10 years)",
                days as f64 / 365.25,
                crate::limits::MAX_PROGRAM_DAYS
            ),
        )
        .field("program.end")
        .expected(format!(
            "an end date at most 10 years after the start {} (on or before {last})",
            def.program.start
        ))
        .found(def.program.end.to_string())
        .hint("check the years of `start` and `end`: a typo in a year gives every report decades of empty weeks");
        if let Some((line, column)) = key_position(text, "program.end") {
            d = d.at(line, column);
        }
        out.push(d);
    }
    for (key, v, lo, hi) in target_problems(&def.targets) {
        let key = format!("targets.{key}");
        let mut d = Diagnostic::error(
            PROGRAM_FILE,
            format!("target out of range: {}", crate::diag::number(v)),
        )
        .field(key.as_str())
        .expected(format!("a number from {lo} to {hi}"))
        .found(crate::diag::number(v));
        if let Some((l, c)) = key_position(text, &key) {
            d = d.at(l, c);
        }
        out.push(d);
    }
    let mut seen = BTreeSet::new();
    let lines = module_lines(text, def.modules.len());
    for (i, m) in def.modules.iter().enumerate() {
        if !seen.insert(m.id.as_str()) {
            let mut d =
                Diagnostic::error(PROGRAM_FILE, format!("module `{}` is listed twice", m.id))
                    .field(format!("modules[{i}].id"))
                    .hint("list each module once; put all its settings under one `with:`");
            if let Some(&l) = lines.get(&i) {
                d = d.at(l, entry_column(text, l, i));
            }
            out.push(d);
        }
    }
    if def.modules.is_empty() {
        out.push(
            err("modules", "no metric modules are listed".into())
                .hint("list at least one module, e.g. `modules: [ {id: trend} ]`"),
        );
    }
    // Below 3 there is no small-cell protection to speak of: 1 prints every count, 2 every
    // count but one person's, so a group report would give a pair's figures away. Threshold
    // rules of statistical disclosure control start at 3 (from memory: Hundepool et al.,
    // Statistical Disclosure Control, Wiley 2012, the "threshold rule"); the default is 11 (CMS
    // cell size suppression policy).
    if def.privacy.min_cell_size < MIN_CELL_FLOOR {
        out.push(
            err(
                "privacy.min_cell_size",
                format!(
                    "the minimum cell size must be at least {MIN_CELL_FLOOR}: below it a group \
                     report would print the figures of one or two people"
                ),
            )
            .expected(format!(
                "a whole number ≥ {MIN_CELL_FLOOR} (11 is the usual choice)"
            ))
            .found(def.privacy.min_cell_size.to_string())
            .hint("use 11 unless your data protection policy names another threshold"),
        );
    }
    if def.report.formats.is_empty() {
        out.push(
            err("report.formats", "no output formats are listed".into())
                .expected("one or more of `html`, `pdf`"),
        );
    }
    // `~` is a shell's word for the home folder; in program.yaml it is a folder named `~` in the
    // program folder: `out: ~/cohort-reports` put every participant's report in
    // `PROGRAM/~/cohort-reports` with no word, while the user looked in their home folder.
    for (key, path) in [
        ("report.out", Some(&def.report.out)),
        ("report.state_dir", def.report.state_dir.as_ref()),
        ("report.templates", def.report.templates.as_ref()),
    ] {
        if let Some(p) = path
            && let Some(why) = tilde_problem(p)
        {
            out.push(
                err(key, why)
                    .expected("a path relative to the program folder, or a full path (`/home/…`)")
                    .found(format!("`{}`", p.display()))
                    .hint("write the home folder's full path; program.yaml paths are not expanded by a shell"),
            );
        }
    }
    if let Some(tpl) = &def.report.templates {
        let dir = root.join(tpl);
        if !dir.is_dir() {
            out.push(
                err("report.templates", "the templates folder does not exist".into())
                    .found(tpl.display().to_string())
                    .hint("give a folder relative to the program folder, or remove the key to use the built-in templates"),
            );
        }
    }
    if let Some(state) = &def.report.state_dir
        && let Some(why) = state_dir_problem(
            root,
            state,
            def.report.templates.as_deref(),
            &def.report.out,
        )
    {
        out.push(
            err("report.state_dir", format!("the ledger folder would be {why}"))
                .found(state.display().to_string())
                .expected("a folder outside participants/, the templates folder and the output folder")
                .hint("the ledger must never sit among the inputs; remove the key to keep it beside `report.out` as `<report.out>.ledger`, the program's own"),
        );
    }
    let max_keys = crate::limits::MAX_GROUP_BY_KEYS;
    if def.report.group_by.len() > max_keys {
        out.push(
            err(
                "report.group_by",
                format!(
                    "{} group_by keys, more than the {max_keys} a group report can split by",
                    def.report.group_by.len()
                ),
            )
            .field(format!("report.group_by[{max_keys}]"))
            .expected(format!("at most {max_keys} group attributes, such as `site` and `team`"))
            .found(def.report.group_by.join(", "))
            .hint("keep the attributes the sponsor needs; each one adds a section per value, and the privacy audit of them all grows far faster than their number"),
        );
    }
    for (i, g) in def.report.group_by.iter().enumerate() {
        if g.trim().is_empty() {
            out.push(
                err("report.group_by", "a group_by key is empty".into())
                    .field(format!("report.group_by[{i}]"))
                    .expected("a group attribute name such as `site`"),
            );
        } else if let Some(j) = def.report.group_by[..i]
            .iter()
            .position(|h| h.trim() == g.trim())
        {
            // `[site, site]` printed every site's section twice.
            out.push(
                err(
                    "report.group_by",
                    format!(
                        "`{}` is listed twice (also at position {})",
                        g.trim(),
                        j + 1
                    ),
                )
                .field(format!("report.group_by[{i}]"))
                .expected("each group attribute once")
                .found(g.clone()),
            );
        }
    }
    let g = &def.guidance;
    for (key, v, lo, hi) in [
        (
            "guidance.loss_bmi_at_least",
            g.loss_bmi_at_least,
            18.5,
            40.0,
        ),
        (
            "guidance.loss_bmi_at_least_70_plus",
            g.loss_bmi_at_least_70_plus,
            18.5,
            40.0,
        ),
        (
            "guidance.underweight_bmi_below",
            g.underweight_bmi_below,
            15.0,
            25.0,
        ),
        (
            "guidance.max_loss_percent_per_week",
            g.max_loss_percent_per_week,
            0.1,
            2.0,
        ),
        (
            "guidance.min_intake_change_kcal",
            g.min_intake_change_kcal,
            10.0,
            500.0,
        ),
        ("guidance.min_walk_minutes", g.min_walk_minutes, 1.0, 60.0),
        ("guidance.max_walk_minutes", g.max_walk_minutes, 10.0, 240.0),
    ] {
        // Sanity limits on the program's own choice (common practice), not clinical advice.
        if let Some(v) = v
            && (!v.is_finite() || v < lo || v > hi)
        {
            out.push(
                err(
                    key,
                    format!("guidance setting out of range: {}", crate::diag::number(v)),
                )
                .expected(format!("a number from {lo} to {hi}"))
                .found(crate::diag::number(v)),
            );
        }
    }
    if let (Some(lo), Some(hi)) = (g.underweight_bmi_below, g.loss_bmi_at_least)
        && lo >= hi
    {
        out.push(
            err(
                "guidance.underweight_bmi_below",
                "the underweight cut-off is not below the loss cut-off".into(),
            )
            .expected(format!("a BMI below guidance.loss_bmi_at_least ({hi})"))
            .found(lo.to_string()),
        );
    }
    if let Some(f) = &def.followup {
        let r = f.recipient.trim();
        if r.is_empty() || r.chars().any(char::is_control) || r.chars().count() > 200 {
            out.push(
                err(
                    "followup.recipient",
                    "the follow-up list needs a recipient in plain words".into(),
                )
                .expected("one line of text naming who receives the list, e.g. `Program nurse, North Plant`")
                .found(format!("{:?}", f.recipient))
                .hint("the list names participants with clinical flags; say who it is for, or remove `followup:` to turn it off"),
            );
        }
    }
    if let Some(delim) = def.input.delimiter
        && (!delim.is_ascii()
            || matches!(delim, '"' | '\n' | '\r')
            || delim.is_ascii_alphanumeric())
    {
        out.push(
            err("input.delimiter", "unusable field delimiter".into())
                .expected("one ASCII punctuation or whitespace character such as `,`, `;` or a tab, not a quote or newline; or no `delimiter` key, to have it recognised per file")
                .found(format!("{delim:?}")),
        );
    }
    if let Some(tz) = &def.input.time_zone
        && super::files::LocalZone::parse(tz).is_none()
    {
        out.push(
            err("input.time_zone", "unknown time zone".into())
                .expected("an IANA time zone name such as `Europe/Berlin` or `America/Chicago`, `UTC`, or an offset such as `+01:00`")
                .found(format!("`{tz}`")),
        );
    }
    for (kind, map) in &def.input.columns {
        let Some(spec) = super::files::ALL_FILES
            .iter()
            .find(|f| f.kind() == kind.as_str())
        else {
            out.push(
                err(
                    &format!("input.columns.{kind}"),
                    format!("unknown file kind `{kind}`"),
                )
                .expected("one of weights, intake, activity, sessions, labs")
                .found(format!("`{kind}`")),
            );
            continue;
        };
        for (written, ours) in map {
            if spec.mapping_target(ours).is_none() {
                let with_units: Vec<String> = spec
                    .header_units
                    .iter()
                    .filter(|(_, allowed, _)| !allowed.is_empty())
                    .map(|(c, allowed, _)| format!("`{c} ({})`", allowed[0]))
                    .collect();
                let units = if with_units.is_empty() {
                    String::new()
                } else {
                    format!(
                        "; a column of bare numbers may name its unit: {}",
                        with_units.join(", ")
                    )
                };
                out.push(
                    err(
                        &format!("input.columns.{kind}"),
                        format!(
                            "`{written}` is mapped to `{ours}`, which is not a column of {}",
                            spec.name
                        ),
                    )
                    .expected(format!(
                        "one of {}{units}",
                        spec.all_columns().collect::<Vec<_>>().join(", ")
                    ))
                    .found(format!("`{ours}`")),
                );
            }
        }
    }
    for (label, a) in &def.activities {
        let key = format!("activities.{label}");
        match (&a.compendium, a.met) {
            (Some(_), Some(_)) | (None, None) => out.push(
                err(
                    &key,
                    "give either `compendium` or `met` for a local activity label".into(),
                )
                .expected("`{ compendium: \"17190\" }` or `{ met: 4.5 }`"),
            ),
            (Some(code), None) => {
                if crate::activities::by_compendium_or_code(code).is_none() {
                    out.push(
                        err(&key, format!("Compendium code `{code}` is not in the tool's activity table"))
                            .expected("a 2011 Compendium code listed by the tool (e.g. `17190`), or give a `met` value instead")
                            .found(format!("`{code}`")),
                    );
                }
            }
            (None, Some(m)) => {
                let (lo, hi) = super::files::MET_RANGE;
                if !(m.is_finite() && (lo..=hi).contains(&m)) {
                    out.push(
                        err(&key, "MET value out of range".into())
                            .expected(format!("a MET value from {lo} to {hi}"))
                            .found(m.to_string()),
                    );
                }
            }
        }
    }
    if let Err(why) = check_date_format(&def.input.date_format) {
        out.push(
            err("input.date_format", format!("unusable date format: {why}"))
                .expected(
                    "a chrono date format with year, month and day, e.g. `%Y-%m-%d` or `%d/%m/%Y`",
                )
                .found(format!("`{}`", def.input.date_format)),
        );
    }
    out
}

/// Checks that `fmt` formats a date (with a time of day and an offset, when it has them) and
/// parses it back to the same day.
pub fn check_date_format(fmt: &str) -> Result<(), String> {
    use chrono::{DateTime, FixedOffset, NaiveDateTime, TimeZone};
    use std::fmt::Write;
    // A day with distinct day, month and year digits, so a format missing one of them cannot
    // round-trip by accident; a time in the afternoon so `%I` without `%p` is caught.
    let offset = FixedOffset::east_opt(2 * 3600).expect("valid offset");
    let probe = offset
        .with_ymd_and_hms(2031, 12, 25, 19, 47, 0)
        .single()
        .expect("valid time");
    let mut s = String::new();
    if write!(s, "{}", probe.format(fmt)).is_err() {
        return Err("it contains an unknown `%` specifier".into());
    }
    let day = probe.date_naive();
    let read = DateTime::parse_from_str(&s, fmt)
        .map(|t| t.naive_local())
        .or_else(|_| NaiveDateTime::parse_from_str(&s, fmt))
        .map(|t| t.date())
        .or_else(|_| NaiveDate::parse_from_str(&s, fmt));
    match read {
        Ok(d) if d == day => Ok(()),
        Ok(_) => Err("a date does not read back as itself".into()),
        Err(_) => Err("it does not give year, month and day".into()),
    }
}

/// Sanity ranges of the targets, used for `program.yaml` and for every profile's overrides
/// alike: (key under `targets:`, lowest, highest). Bounds are sanity limits that catch typing
/// errors (common practice), not clinical advice.
pub const TARGET_RANGES: [(&str, f64, f64); 4] = [
    ("weight_change_percent", -50.0, 50.0),
    ("activity_minutes_per_week", 0.0, 3000.0),
    ("weigh_ins_per_week", 0.0, 21.0),
    ("food_log_days_per_week", 0.0, 7.0),
];

/// Every target given in `t` that is not a finite number within [`TARGET_RANGES`]:
/// (key, value, lowest, highest).
pub fn target_problems(t: &super::TargetsDef) -> Vec<(&'static str, f64, f64, f64)> {
    let values = [
        t.weight_change_percent,
        t.activity_minutes_per_week,
        t.weigh_ins_per_week,
        t.food_log_days_per_week,
    ];
    TARGET_RANGES
        .iter()
        .zip(values)
        .filter_map(|(&(key, lo, hi), v)| {
            let v = v?;
            (!v.is_finite() || v < lo || v > hi).then_some((key, v, lo, hi))
        })
        .collect()
}

/// Line and, when the key is found on it, the 1-based column of the value of the key at
/// `path` (`targets.weight_change_percent`), for diagnostics.
pub fn key_position(text: &str, path: &str) -> Option<(u64, Option<u64>)> {
    let line = key_line(text, path)?;
    let last = path.rsplit('.').next().unwrap_or(path);
    let column = text.lines().nth(line as usize - 1).and_then(|l| {
        let mut from = 0;
        while let Some(i) = l[from..].find(last) {
            let after = &l[from + i + last.len()..];
            let rest = after.trim_start();
            if let Some(value) = rest.strip_prefix(':') {
                let at = l.len() - value.trim_start().len();
                return Some(l[..at].chars().count() as u64 + 1);
            }
            from += i + last.len();
        }
        None
    });
    Some((line, column))
}

/// The 1-based column where entry `index` of `modules:`, found on 1-based `line` by
/// [`module_lines`], starts: after its indentation and `- ` in a block list, at its own `{` in a
/// flow list on one line.
fn entry_column(text: &str, line: u64, index: usize) -> Option<u64> {
    let l = text
        .lines()
        .nth(usize::try_from(line).ok()?.checked_sub(1)?)?;
    let at = match l.trim_start().strip_prefix('-') {
        Some(rest) => l.len() - rest.trim_start().len(),
        None => {
            let open = l.find('[')?;
            let mut depth = 0usize;
            let mut starts = Vec::new();
            for (i, c) in l[open + 1..].char_indices() {
                match c {
                    '{' if depth == 0 => {
                        starts.push(open + 1 + i);
                        depth += 1;
                    }
                    '{' | '[' => depth += 1,
                    '}' | ']' if depth > 0 => depth -= 1,
                    _ => {}
                }
            }
            *starts.get(index)?
        }
    };
    Some(l[..at].chars().count() as u64 + 1)
}

/// Where `key` is written in entry `index` of `modules:` (`id`, `command`, `with`, or a
/// setting under `with:`), found by scanning the entry's text in `source` (its lines in a block
/// list, its part of the line in a flow list on one line): its line, and the 1-based column of
/// its value when `value` and one is written on that line, else of the key. Without `key`, or
/// when it is not found there, the entry's own line and column. `None` when the entry's line is
/// not known. The module registry's errors were at the entry's line alone ("program.yaml:27:
/// unknown setting `bogus`" for a `with:` on line 28).
pub fn module_key_position(
    source: &str,
    lines: &BTreeMap<usize, u64>,
    index: usize,
    key: Option<&str>,
    value: bool,
) -> Option<(u64, Option<u64>)> {
    let &start = lines.get(&index)?;
    let entry = (start, entry_column(source, start, index));
    let Some(key) = key else {
        return Some(entry);
    };
    let all: Vec<&str> = source.lines().collect();
    let first = usize::try_from(start).ok()?.checked_sub(1)?;
    // The entry's text, as (line index, byte offset where its part starts, its part).
    let mut parts: Vec<(usize, usize, &str)> = Vec::new();
    let next = lines.get(&(index + 1));
    match all.get(first) {
        Some(l) if !l.trim_start().starts_with('-') => {
            // A flow list on one line: from this entry's `{` to the next one's.
            let col = |i: usize| {
                entry_column(source, start, i)
                    .and_then(|c| l.char_indices().nth(c as usize - 1).map(|(b, _)| b))
            };
            let to = match next {
                Some(&n) if n == start => col(index + 1).unwrap_or(l.len()),
                _ => l.len(),
            };
            let from = col(index)?;
            parts.push((first, from, &l[from..to.max(from)]));
        }
        _ => {
            let end = next.map_or(all.len(), |&n| n as usize - 1);
            for (j, l) in all.iter().enumerate().take(end).skip(first) {
                let t = l.trim_start();
                if j > first && !t.is_empty() && !t.starts_with('#') && l.len() == t.len() {
                    break;
                }
                parts.push((j, 0, l));
            }
        }
    }
    for (j, offset, part) in parts {
        // Outside a comment.
        let part = part.split(" #").next().unwrap_or(part);
        let mut from = 0;
        while let Some(i) = part[from..].find(key) {
            let at = from + i;
            let before = part[..at].chars().next_back();
            let rest = &part[at + key.len()..];
            let after = rest.trim_start();
            if before.is_none_or(|c| matches!(c, ' ' | '{' | ',' | '-' | '\t'))
                && let Some(v) = after.strip_prefix(':')
            {
                let key_byte = offset + at;
                let v_trim = v.trim_start();
                let byte = if value && !v_trim.is_empty() {
                    offset + part.len() - v_trim.len()
                } else {
                    key_byte
                };
                let line = all[j];
                let column = line[..byte.min(line.len())].chars().count() as u64 + 1;
                return Some((j as u64 + 1, Some(column)));
            }
            from = at + key.len();
        }
    }
    Some(entry)
}

/// Letters, digits, `-` and `_`; not empty; at most 64 characters (it names files).
pub fn is_plain_id(s: &str) -> bool {
    !s.is_empty()
        && s.len() <= 64
        && s.chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '_')
}

/// Reads a whole input file without ever opening it for writing, without following a link and
/// only when it is a regular file within its size limit ([`crate::limits::read_input`]).
pub fn read_bytes(path: &Path) -> std::io::Result<Vec<u8>> {
    crate::limits::read_input(path)
}

/// How to save a YAML file the tool can read (the hint was about spreadsheets' "CSV UTF-8").
const UTF8_HINT: &str = "save the file as UTF-8 (in most editors: Save As → Encoding: UTF-8)";

/// Decodes UTF-8 (a leading byte-order mark is skipped); on failure the diagnostic names the
/// line and the byte column of the first bad byte.
// A Diagnostic is the error on purpose (it is what the user sees); it is built rarely.
#[allow(clippy::result_large_err)]
pub fn decode_utf8<'a>(bytes: &'a [u8], file: &str) -> Result<&'a str, Diagnostic> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    // UTF-16 (an editor's "Unicode"): with its byte-order mark it was "byte 0xFF at byte
    // column 1" with a hint about spreadsheets' CSV, and without one, valid UTF-8 full of zero
    // bytes that the YAML parser called an "unprintable character", with a hint about tabs.
    let utf16 = match bytes {
        [0xFF, 0xFE, ..] => Some("a UTF-16 little-endian byte-order mark (bytes FF FE)"),
        [0xFE, 0xFF, ..] => Some("a UTF-16 big-endian byte-order mark (bytes FE FF)"),
        [a, 0, ..] | [0, a, ..] if *a != 0 => Some("a zero byte beside each character (UTF-16)"),
        _ => None,
    };
    if let Some(found) = utf16 {
        return Err(Diagnostic::error(
            file,
            "the file is UTF-16 text; this file is read as UTF-8 only",
        )
        .at(1, Some(1))
        .expected("UTF-8 text")
        .found(found)
        .hint(UTF8_HINT));
    }
    std::str::from_utf8(bytes).map_err(|e| {
        let at = e.valid_up_to();
        let before = &bytes[..at];
        let line = before.iter().filter(|&&b| b == b'\n').count() as u64 + 1;
        let line_start = before
            .iter()
            .rposition(|&b| b == b'\n')
            .map_or(0, |p| p + 1);
        let col = (at - line_start) as u64 + 1;
        Diagnostic::error(file, "the file is not valid UTF-8 text")
            .at(line, Some(col))
            .expected("UTF-8 text")
            .found(format!("byte 0x{:02X} at byte column {col}", bytes[at]))
            .hint(UTF8_HINT)
    })
}

/// 1-based line of the key path `a.b` in block-style YAML, found by scanning indentation.
/// Good enough for pointing at a key after serde has parsed the file; `None` when not found
/// (e.g. flow style).
pub fn key_line(text: &str, path: &str) -> Option<u64> {
    let mut parts = path.split('.').peekable();
    let mut want = parts.next()?;
    let mut min_indent = 0usize;
    let mut found_line = None;
    for (i, line) in text.lines().enumerate() {
        let trimmed = line.trim_start();
        if trimmed.is_empty() || trimmed.starts_with('#') {
            continue;
        }
        let indent = line.len() - trimmed.len();
        if found_line.is_some() && indent < min_indent {
            // Left the parent mapping without finding the child.
            return found_line;
        }
        if indent < min_indent {
            continue;
        }
        let key = trimmed.split(':').next().unwrap_or("").trim();
        if trimmed.contains(':') && key == want {
            found_line = Some(i as u64 + 1);
            match parts.next() {
                Some(next) => {
                    // A flow mapping on the same line: the child is on this line too.
                    if trimmed[key.len()..]
                        .trim_start_matches(':')
                        .trim_start()
                        .starts_with('{')
                    {
                        return found_line;
                    }
                    want = next;
                    min_indent = indent + 1;
                }
                None => return found_line,
            }
        }
    }
    found_line
}

/// [`key_position`] in the program's `program.yaml` as it is now on disk, for a message about
/// a value found wrong after loading, such as a `report.out` a run may not write.
pub fn key_position_in_file(root: &Path, path: &str) -> Option<(u64, Option<u64>)> {
    let bytes = read_bytes(&root.join(PROGRAM_FILE)).ok()?;
    key_position(&decode_program(&bytes).ok()?, path)
}

/// 1-based line of each `modules:` entry, by index, when the entries can be found by scanning
/// (block list: one `- ` line each; flow list on one line: that line for all). Empty otherwise.
pub fn module_lines(text: &str, count: usize) -> BTreeMap<usize, u64> {
    let mut out = BTreeMap::new();
    let lines: Vec<&str> = text.lines().collect();
    let Some(start) = lines.iter().position(|l| l.starts_with("modules:")) else {
        return out;
    };
    let head = lines[start]["modules:".len()..].trim();
    if head.starts_with('[') {
        if head.ends_with(']') {
            for i in 0..count {
                out.insert(i, start as u64 + 1);
            }
        }
        return out;
    }
    let mut dash_indent = None;
    let mut found = Vec::new();
    for (j, l) in lines.iter().enumerate().skip(start + 1) {
        let t = l.trim_start();
        if t.is_empty() || t.starts_with('#') {
            continue;
        }
        let indent = l.len() - t.len();
        if indent == 0 && !t.starts_with('-') {
            break;
        }
        if t.starts_with('-') {
            let di = *dash_indent.get_or_insert(indent);
            if indent == di {
                found.push(j as u64 + 1);
            }
        }
    }
    if found.len() == count {
        out.extend(found.into_iter().enumerate());
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    const GOOD: &str = "format_version: 1
program: { id: demo-2026, title: \"Demo\", start: 2026-04-01, end: 2026-09-30 }
units: metric
modules: [ {id: trend}, {id: energy}, {id: adherence}, {id: outcomes} ]
";

    fn root() -> &'static Path {
        Path::new(".")
    }

    /// A program of one day was told it "ends before it starts" (attack18).
    #[test]
    fn a_program_of_one_day_is_not_said_to_end_before_it_starts() {
        let one_day = GOOD.replace("end: 2026-09-30", "end: 2026-04-01");
        let e = parse_program(root(), &one_day).unwrap_err();
        assert_eq!(e.len(), 1, "{e:?}");
        assert_eq!(
            e[0].message,
            "the program ends on the day it starts; a program runs for two days or more"
        );
        assert_eq!(e[0].field.as_deref(), Some("program.end"));
        let before = GOOD.replace("end: 2026-09-30", "end: 2026-03-31");
        let e = parse_program(root(), &before).unwrap_err();
        assert_eq!(e[0].message, "the program ends before it starts");
    }

    #[test]
    fn sample_program_loads() {
        let p = parse_program(root(), GOOD).unwrap();
        assert_eq!(p.info.id, "demo-2026");
        assert_eq!(p.info.targets, Targets::default());
        assert_eq!(p.def.modules.len(), 4);
        assert_eq!(p.module_lines.get(&3), Some(&4));
        assert_eq!(p.def.input.delimiter, None);
    }

    /// A wellness lead writing program.yaml from the README's table wrote its keys as they are
    /// named there (`program.id: fit`) and the modules as a list of ids; the messages said
    /// "unknown key" with a hint about spelling, and "expected struct ModuleDef" with a hint
    /// to quote numbers.
    #[test]
    fn the_tables_dotted_names_and_a_list_of_module_ids_are_explained() {
        let dotted = "format_version: 1\nprogram.id: fit\n";
        let e = parse_program(root(), dotted).unwrap_err();
        let hint = e[0].hint.as_deref().unwrap_or_default();
        assert!(
            hint.contains("`program.id` is `id:` indented under `program:`"),
            "{}",
            e[0]
        );
        let ids = GOOD.replace(
            "modules: [ {id: trend}, {id: energy}, {id: adherence}, {id: outcomes} ]",
            "modules: [trend, energy, adherence, outcomes]",
        );
        let e = parse_program(root(), &ids).unwrap_err();
        let d = &e[0];
        assert!(!d.to_string().contains("struct"), "{d}");
        assert_eq!(
            d.expected.as_deref(),
            Some("a mapping of keys and values"),
            "{d}"
        );
        assert!(
            d.hint
                .as_deref()
                .unwrap_or_default()
                .contains("write each module as `- id: trend`"),
            "{d}"
        );
    }

    #[test]
    fn input_and_activities_keys_are_checked() {
        let good = format!(
            "{GOOD}input:\n  time_zone: Europe/Berlin\n  columns:\n    weights: {{ \"Body Weight\": weight, Mass: weight (kg) }}\nactivities:\n  \"Zumba Gold\": {{ met: 5.5 }}\n  \"Lunch walk\": {{ compendium: \"17190\" }}\n"
        );
        let p = parse_program(root(), &good).unwrap();
        assert_eq!(p.def.input.time_zone.as_deref(), Some("Europe/Berlin"));
        assert_eq!(p.def.activities.len(), 2);
        let bad = format!(
            "{GOOD}input:\n  time_zone: Mars/Olympus\n  columns:\n    weights: {{ \"Body Weight\": mass, Mass: weight (oz) }}\n    meals: {{ a: kcal }}\nactivities:\n  zumba: {{ met: 50 }}\n  walk: {{ compendium: \"99999\" }}\n  both: {{ met: 3, compendium: \"17190\" }}\n"
        );
        let e = parse_program(root(), &bad).unwrap_err();
        let messages: Vec<&str> = e.iter().map(|d| d.message.as_str()).collect();
        assert_eq!(e.len(), 7, "{messages:#?}");
        for words in [
            "unknown time zone",
            "`Mass` is mapped to `weight (oz)`, which is not a column of weights.csv",
            "`Body Weight` is mapped to `mass`, which is not a column of weights.csv",
            "unknown file kind `meals`",
            "MET value out of range",
            "Compendium code `99999` is not in the tool's activity table",
            "give either `compendium` or `met`",
        ] {
            assert!(
                messages.iter().any(|m| m.contains(words)),
                "{words}: {messages:#?}"
            );
        }
    }

    #[test]
    fn targets_apply_over_defaults() {
        let text = format!("{GOOD}targets:\n  weight_change_percent: -7\n");
        let p = parse_program(root(), &text).unwrap();
        assert_eq!(p.info.targets.weight_change_percent, -7.0);
        assert_eq!(p.info.targets.activity_minutes_per_week, 150.0);
    }

    #[test]
    fn block_module_lines_are_found() {
        let text = "format_version: 1
program:
  id: demo
  title: Demo
  start: 2026-04-01
  end: 2026-09-30
modules:
  - id: trend
  - id: energy
    with:
      equation: mifflin
  # a comment
  - id: outcomes
report:
  formats: [html]
";
        let p = parse_program(root(), text).unwrap();
        assert_eq!(
            p.module_lines.into_iter().collect::<Vec<_>>(),
            vec![(0, 8), (1, 9), (2, 13)]
        );
        assert_eq!(key_line(text, "program.end"), Some(6));
        assert_eq!(key_line(text, "report.formats"), Some(15));
    }

    #[test]
    fn unknown_key_names_key_and_line() {
        let text = format!("{GOOD}colour: blue\n");
        let e = parse_program(root(), &text).unwrap_err();
        assert_eq!(e.len(), 1);
        assert_eq!(e[0].line, Some(5));
        assert_eq!(e[0].found.as_deref(), Some("`colour`"));
    }

    #[test]
    fn followup_and_guidance_settings_are_checked_with_their_line() {
        let ok = format!(
            "{GOOD}followup:\n  recipient: Program nurse\nguidance:\n  min_walk_minutes: 15\n"
        );
        let p = parse_program(root(), &ok).unwrap();
        assert_eq!(
            p.def.followup.as_ref().map(|f| f.recipient.as_str()),
            Some("Program nurse")
        );
        assert_eq!(p.def.guidance.min_walk_minutes, Some(15.0));
        let bad =
            format!("{GOOD}followup:\n  recipient: '  '\nguidance:\n  loss_bmi_at_least: 60\n");
        let e = parse_program(root(), &bad).unwrap_err();
        let good_lines = GOOD.lines().count() as u64;
        let by = |f: &str| e.iter().find(|d| d.field.as_deref() == Some(f)).unwrap();
        assert_eq!(by("followup.recipient").line, Some(good_lines + 2));
        assert_eq!(by("guidance.loss_bmi_at_least").line, Some(good_lines + 4));
        assert_eq!(e.len(), 2, "{e:#?}");
        // An unknown key under followup is refused like any other.
        let typo = format!("{GOOD}followup:\n  recipent: Program nurse\n");
        assert!(parse_program(root(), &typo).is_err());
    }

    /// Problems found after the file was read (an id that is not a plain name, an empty title,
    /// a module listed twice, a minimum cell size under 3) were located by their line alone;
    /// they are at the value's column (the entry's, for a module), in block and in flow style.
    #[test]
    fn problems_after_reading_are_located_at_line_and_column() {
        let block = "format_version: 1\nprogram:\n  id: \"../x\"\n  title: \"\"\n  start: 2026-04-01\n  end: 2026-09-30\nmodules:\n  - id: trend\n  -   id: trend\nprivacy:\n  min_cell_size: 1\n";
        let e = parse_program(root(), block).unwrap_err();
        let at = |field: &str, e: &[Diagnostic]| {
            let d = e
                .iter()
                .find(|d| d.field.as_deref() == Some(field))
                .unwrap_or_else(|| panic!("{field}: {e:#?}"));
            (d.line, d.column)
        };
        assert_eq!(at("program.id", &e), (Some(3), Some(7)));
        assert_eq!(at("program.title", &e), (Some(4), Some(10)));
        assert_eq!(at("modules[1].id", &e), (Some(9), Some(7)));
        assert_eq!(at("privacy.min_cell_size", &e), (Some(11), Some(18)));
        let flow = GOOD
            .replace("id: demo-2026", "id: CON.x")
            .replace("{id: adherence}", "{id: trend, with: {a: 1}}");
        let e = parse_program(root(), &flow).unwrap_err();
        assert_eq!(at("program.id", &e), (Some(2), Some(16)));
        // The third entry of `modules: [ {id: trend}, {id: energy}, {id: trend, …} ]`.
        assert_eq!(at("modules[2].id", &e), (Some(4), Some(39)));
    }

    /// A year typo (`start: 1950-01-01`) gave a program of a century, and a 48-person run took
    /// 90 s and 1.5 GB over decades of empty weeks. Over 10 years (3,653 days) it is refused at
    /// `program.end`'s value, in block and in flow style; exactly 10 years is accepted.
    #[test]
    fn a_program_of_decades_is_refused_at_its_end_date() {
        let block = "format_version: 1\nprogram:\n  id: p\n  title: P\n  start: 1950-01-01\n  end: 2049-12-31\nmodules: [ {id: trend} ]\n";
        let e = parse_program(root(), block).unwrap_err();
        assert_eq!(e.len(), 1, "{e:#?}");
        let d = &e[0];
        assert_eq!(d.field.as_deref(), Some("program.end"));
        assert_eq!((d.line, d.column), (Some(6), Some(8)));
        assert!(
            d.message.contains(
                "the program runs 36524 days (about 100 years), longer than the limit of 3653 days"
            ),
            "{}",
            d.message
        );
        assert_eq!(d.found.as_deref(), Some("2049-12-31"));
        assert_eq!(
            d.expected.as_deref(),
            Some(
                "an end date at most 10 years after the start 1950-01-01 (on or before 1960-01-02)"
            )
        );
        let flow = GOOD.replace("end: 2026-09-30", "end: 2062-09-30");
        let e = parse_program(root(), &flow).unwrap_err();
        assert_eq!((e[0].line, e[0].column), (Some(2), Some(66)), "{e:#?}");
        // Exactly the limit: accepted.
        let ten = GOOD.replace("end: 2026-09-30", "end: 2036-04-01");
        assert!(parse_program(root(), &ten).is_ok());
        let over = GOOD.replace("end: 2026-09-30", "end: 2036-04-02");
        assert!(parse_program(root(), &over).is_err());
    }

    #[test]
    fn every_semantic_problem_is_reported_at_once() {
        let text = "format_version: 2
program:
  id: demo 2026
  title: Demo
  start: 2026-09-30
  end: 2026-04-01
modules:
  - id: trend
  - id: trend
report:
  formats: []
  templates: no-such-folder
  group_by: ['']
privacy:
  min_cell_size: 0
input:
  delimiter: '\"'
  date_format: '%Y-%m'
";
        let e = parse_program(root(), text).unwrap_err();
        let fields: Vec<&str> = e.iter().filter_map(|d| d.field.as_deref()).collect();
        for want in [
            "format_version",
            "program.id",
            "program.end",
            "modules[1].id",
            "privacy.min_cell_size",
            "report.formats",
            "report.templates",
            "report.group_by[0]",
            "input.delimiter",
            "input.date_format",
        ] {
            assert!(fields.contains(&want), "missing {want}: {fields:?}");
        }
        assert_eq!(e.len(), 10, "{e:#?}");
        let by = |f: &str| e.iter().find(|d| d.field.as_deref() == Some(f)).unwrap();
        assert_eq!(by("program.id").line, Some(3));
        assert_eq!(by("program.end").line, Some(6));
        assert_eq!(by("modules[1].id").line, Some(9));
        assert_eq!(by("input.delimiter").line, Some(17));
    }

    #[test]
    fn a_group_by_key_listed_twice_is_an_error() {
        let text = "format_version: 1
program: { id: demo, title: Demo, start: 2026-04-01, end: 2026-09-30 }
modules: [ {id: trend} ]
report:
  group_by: [site, team, ' site']
";
        let e = parse_program(root(), text).unwrap_err();
        assert_eq!(e.len(), 1, "{e:#?}");
        assert_eq!(e[0].field.as_deref(), Some("report.group_by[2]"));
        assert_eq!(e[0].message, "`site` is listed twice (also at position 1)");
        let ok = text.replace(", ' site'", "");
        assert!(parse_program(root(), &ok).is_ok());
    }

    #[test]
    fn more_group_by_keys_than_the_limit_is_an_error_at_the_key() {
        // 2,000 keys (a generated or pasted list) made the group phase of a 12-person run grow
        // to 22 GB before the system killed it; 6 keys already took 86 s.
        let keys: Vec<String> = (0..6).map(|i| format!("k{i}")).collect();
        let text = format!(
            "format_version: 1
program: {{ id: demo, title: Demo, start: 2026-04-01, end: 2026-09-30 }}
modules: [ {{id: trend}} ]
report:
  group_by: [{}]
",
            keys.join(", ")
        );
        let e = parse_program(root(), &text).unwrap_err();
        assert_eq!(e.len(), 1, "{e:#?}");
        assert_eq!(e[0].field.as_deref(), Some("report.group_by[5]"));
        assert_eq!(e[0].line, Some(5), "{e:#?}");
        assert_eq!(
            e[0].message,
            "6 group_by keys, more than the 5 a group report can split by"
        );
        let ok = text.replace(", k5", "");
        assert!(parse_program(root(), &ok).is_ok());
    }

    /// `out: ~/cohort-reports` put every participant's report into a folder named `~` inside
    /// the program folder, with no word (check: "ok"), while the user looked in their home.
    #[test]
    fn a_path_that_starts_with_a_tilde_is_an_error_at_its_line() {
        let text = "format_version: 1
program: { id: demo, title: Demo, start: 2026-04-01, end: 2026-09-30 }
modules: [ {id: trend} ]
report:
  out: ~/cohort-reports
  state_dir: ~ana/ledger
  templates: \"~\"
";
        let e = parse_program(root(), text).unwrap_err();
        let found: Vec<(Option<&str>, Option<u64>, Option<&str>)> = e
            .iter()
            .filter(|d| d.message.starts_with("the path starts with `~`"))
            .map(|d| (d.field.as_deref(), d.line, d.found.as_deref()))
            .collect();
        assert_eq!(
            found,
            [
                (Some("report.out"), Some(5), Some("`~/cohort-reports`")),
                (Some("report.state_dir"), Some(6), Some("`~ana/ledger`")),
                (Some("report.templates"), Some(7), Some("`~`")),
            ],
            "{e:#?}"
        );
        // A `~` further on is an ordinary folder name.
        let ok = "format_version: 1
program: { id: demo, title: Demo, start: 2026-04-01, end: 2026-09-30 }
modules: [ {id: trend} ]
report:
  out: reports/~old
";
        assert!(parse_program(root(), ok).is_ok());
    }

    #[test]
    fn a_minimum_cell_size_below_three_is_refused() {
        let base = "format_version: 1\nprogram: {id: p, title: P, start: 2026-04-01, end: 2026-09-30}\n\
                    modules: [{id: trend}]\n";
        for (v, ok) in [(0, false), (1, false), (2, false), (3, true), (11, true)] {
            let text = format!("{base}privacy:\n  min_cell_size: {v}\n");
            match parse_program(root(), &text) {
                Ok(p) => {
                    assert!(ok, "{v} accepted");
                    assert_eq!(p.def.privacy.min_cell_size, v);
                }
                Err(e) => {
                    assert!(!ok, "{v} refused: {e:?}");
                    assert_eq!(e.len(), 1, "{e:?}");
                    assert_eq!(e[0].field.as_deref(), Some("privacy.min_cell_size"));
                    assert_eq!(e[0].line, Some(5), "{e:?}");
                    assert_eq!(e[0].found.as_deref(), Some(v.to_string().as_str()));
                }
            }
        }
    }

    #[test]
    fn date_formats_are_checked_by_round_trip() {
        // Times and offsets are allowed; a 12-hour clock needs its AM/PM.
        assert!(check_date_format("%Y-%m-%d %H:%M").is_ok());
        assert!(check_date_format("%d.%m.%Y %H:%M:%S %z").is_ok());
        assert!(check_date_format("%m/%d/%Y %I:%M %p").is_ok());
        assert!(check_date_format("%Y-%m-%d").is_ok());
        assert!(check_date_format("%d/%m/%Y").is_ok());
        assert!(check_date_format("%m/%d/%Y").is_ok());
        assert!(check_date_format("%Y-%m").is_err());
        assert!(check_date_format("%Q-%m-%d").is_err());
        assert!(check_date_format("").is_err());
    }

    #[test]
    fn missing_and_non_utf8_program_files_are_errors() {
        let tmp = tempfile::tempdir().unwrap();
        let e = load_program(tmp.path()).unwrap_err();
        assert!(e[0].message.contains("cannot read"), "{}", e[0]);
        std::fs::write(
            tmp.path().join("program.yaml"),
            b"format_version: 1\nprogram: \xff\n",
        )
        .unwrap();
        let e = load_program(tmp.path()).unwrap_err();
        assert_eq!((e[0].line, e[0].column), (Some(2), Some(10)), "{}", e[0]);
        let e = load_program(&tmp.path().join("nowhere")).unwrap_err();
        assert!(e[0].message.contains("does not exist"));
    }

    /// A program.yaml saved as UTF-16 was "byte 0xFF at byte column 1" with a hint about
    /// spreadsheets' "CSV UTF-8" (with a byte-order mark), or an "unprintable character" with
    /// a hint about tabs (without one); then it was refused as UTF-16 text, while a
    /// profile.yaml saved the same way was read. It is read now, by the rule every input file
    /// is read with, with or without the mark and in either byte order; UTF-16 that does not
    /// decode is refused with what it is and how to save it as UTF-8.
    #[test]
    fn a_utf16_program_file_is_read_as_a_profile_is() {
        let tmp = tempfile::tempdir().unwrap();
        let le: Vec<u8> = GOOD.encode_utf16().flat_map(u16::to_le_bytes).collect();
        let be: Vec<u8> = GOOD.encode_utf16().flat_map(u16::to_be_bytes).collect();
        let utf8 = {
            std::fs::write(tmp.path().join("program.yaml"), GOOD).unwrap();
            load_program(tmp.path()).expect("UTF-8 reads")
        };
        for bytes in [
            [&[0xFF, 0xFE][..], &le].concat(),
            [&[0xFE, 0xFF][..], &be].concat(),
            le.clone(),
            be.clone(),
        ] {
            std::fs::write(tmp.path().join("program.yaml"), &bytes).unwrap();
            let p = load_program(tmp.path()).unwrap_or_else(|e| panic!("{e:?}"));
            assert_eq!(p.def, utf8.def);
            assert_eq!(p.source, utf8.source);
            assert_eq!(
                key_position_in_file(tmp.path(), "program.title"),
                key_position(GOOD, "program.title")
            );
        }
        // Cut off in the middle of a character: refused, saying what it is.
        let mut odd = [&[0xFF, 0xFE][..], &le].concat();
        odd.push(b'x');
        std::fs::write(tmp.path().join("program.yaml"), odd).unwrap();
        let e = load_program(tmp.path()).unwrap_err();
        assert_eq!(
            e[0].message,
            "the file starts as UTF-16 little-endian text but has an odd number of bytes; it is cut off or not text; the file is not used"
        );
        assert_eq!((e[0].line, e[0].column), (Some(1), Some(1)));
        assert_eq!(e[0].hint.as_deref(), Some(UTF8_HINT));
        // Not valid UTF-8 otherwise: the hint is about saving the file as UTF-8, not a CSV.
        std::fs::write(
            tmp.path().join("program.yaml"),
            b"format_version: 1\n\xe9\n",
        )
        .unwrap();
        let e = load_program(tmp.path()).unwrap_err();
        assert_eq!(e[0].hint.as_deref(), Some(UTF8_HINT), "{}", e[0]);
    }

    #[test]
    fn plain_ids() {
        assert!(is_plain_id("LW-0147"));
        assert!(is_plain_id("a_b"));
        for bad in ["", "a b", "../x", "a/b", "é", "a\tb", ".."] {
            assert!(!is_plain_id(bad), "{bad:?}");
        }
    }
}

//! `profile.yaml`: who the participant is. Required; any error here makes the participant
//! unusable (the energy equations need sex, age and height; every date check needs enrolment).

use super::quantity::parse_length;
use super::table::FileCtx;
use crate::diag::Diagnostic;
use crate::program::TargetsDef;
use crate::program::load::key_line;
use chrono::NaiveDate;
use cohortpress_metric_api::{Profile, Sex, Targets, WithdrawalReason};
use serde::Deserialize;
use std::collections::BTreeMap;

/// `profile.yaml` as written.
/// `sex:` as written in profile.yaml. `unrecorded` is a value of its own, not a missing key, so
/// that a profile that forgot the key is still told so: a participant who did not give their sex
/// (or whose record holds neither value) gets a report whose energy figures carry the added
/// uncertainty, and the key's absence stays an error.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SexDef {
    /// Female.
    Female,
    /// Male.
    Male,
    /// Not recorded (declined, neither, or unknown).
    Unrecorded,
}

impl SexDef {
    /// The sex the equations use; `None` when not recorded.
    pub fn sex(self) -> Option<Sex> {
        match self {
            SexDef::Female => Some(Sex::Female),
            SexDef::Male => Some(Sex::Male),
            SexDef::Unrecorded => None,
        }
    }
}

#[derive(Debug, Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct ProfileDef {
    /// Must equal the folder name.
    pub id: String,
    /// Display name (own report only).
    #[serde(default)]
    pub name: Option<String>,
    /// `female`, `male` or `unrecorded`.
    pub sex: SexDef,
    /// Birth date (or `age`).
    #[serde(default)]
    pub birth_date: Option<NaiveDate>,
    /// Age in years at enrolment (or `birth_date`).
    #[serde(default)]
    pub age: Option<f64>,
    /// Height with its unit (`168 cm`, `5 ft 6 in`, …); kept untyped so a bare number can be
    /// refused with a helpful message.
    pub height: serde_yaml::Value,
    /// Enrolment date.
    pub enrolled: NaiveDate,
    /// Withdrawal date.
    #[serde(default)]
    pub withdrew: Option<NaiveDate>,
    /// What the withdrawal was: `consent` (the default) or `stopped_program`. Only with
    /// `withdrew`.
    #[serde(default)]
    pub withdrawal_reason: Option<WithdrawalReason>,
    /// Group attributes (site, team, …): text values (numbers are taken as text).
    #[serde(default)]
    pub groups: BTreeMap<String, serde_yaml::Value>,
    /// Baseline body fat, %.
    #[serde(default)]
    pub body_fat_percent: Option<f64>,
    /// Target overrides.
    #[serde(default)]
    pub targets: Option<TargetsDef>,
    /// Clinical flags.
    #[serde(default)]
    pub flags: Vec<String>,
}

/// Profile flags that change a report: a glucose-lowering medicine (cautions, and a
/// medication review with fast loss or low intake), a pregnancy (no suggestions for change
/// until a clinician has been involved; the energy model and the floors are for adults who are
/// not pregnant) and steps in the weigh-ins that are real changes of body weight (counted in
/// the change since the start), and weigh-ins with a BMI of 60 or more, or in pounds under
/// 18.5, that were checked (read as written rather than refused as the other unit).
pub const KNOWN_FLAGS: [&str; 6] = [
    "glucose-lowering-medication",
    "pregnant",
    cohortpress_metric_outcomes::BREASTFEEDING_FLAG,
    cohortpress_metric_trend::view::REAL_STEPS_FLAG,
    HIGH_BMI_CHECKED_FLAG,
    LOW_BMI_CHECKED_FLAG,
];

/// The profile flag saying weigh-ins at a BMI of [`super::records::HIGH_BMI`] or more are
/// this person's, in the unit written.
pub const HIGH_BMI_CHECKED_FLAG: &str = "high-bmi-checked";

/// The profile flag saying weigh-ins in pounds at a BMI under
/// [`super::records::UNDERWEIGHT_BMI`] are this person's, in the unit written.
pub const LOW_BMI_CHECKED_FLAG: &str = "low-bmi-checked";

/// A profile flag in its written form: case, spaces and underscores do not matter
/// (`Glucose_lowering medication` is `glucose-lowering-medication`), and `pregnancy` is
/// `pregnant`, `breast feeding` and `lactating` are `breastfeeding`. A misspelt flag that
/// changes nothing would silently drop a caution.
pub fn normalise_flag(flag: &str) -> String {
    let f = flag
        .trim()
        .to_lowercase()
        .split(|c: char| c == '_' || c == '-' || c.is_whitespace())
        .filter(|w| !w.is_empty())
        .collect::<Vec<_>>()
        .join("-");
    match f.as_str() {
        "pregnancy" => "pregnant".into(),
        "breast-feeding" | "lactating" => "breastfeeding".into(),
        _ => f,
    }
}

/// Plausible height, cm (common practice: outside it a value is a typing or unit error).
pub const HEIGHT_CM_RANGE: (f64, f64) = (100.0, 250.0);
/// Plausible baseline body fat, % (common practice: below essential fat or above what
/// measurement devices report).
pub const BODY_FAT_RANGE: (f64, f64) = (3.0, 70.0);

/// The keys of `profile.yaml`, in the order [`ProfileDef`] declares them (the order serde names
/// them in "expected one of").
const PROFILE_KEYS: &[&str] = &[
    "id",
    "name",
    "sex",
    "birth_date",
    "age",
    "height",
    "enrolled",
    "withdrew",
    "withdrawal_reason",
    "groups",
    "body_fat_percent",
    "targets",
    "flags",
];

/// `profile.yaml` as read: a key is `None` when it is absent or could not be read.
struct ProfileRead {
    id: Option<String>,
    name: Option<String>,
    sex: Option<SexDef>,
    birth_date: Option<NaiveDate>,
    age: Option<f64>,
    height: Option<serde_yaml::Value>,
    enrolled: Option<NaiveDate>,
    withdrew: Option<NaiveDate>,
    withdrawal_reason: Option<WithdrawalReason>,
    groups: BTreeMap<String, serde_yaml::Value>,
    body_fat_percent: Option<f64>,
    targets: Option<TargetsDef>,
    flags: Vec<String>,
    /// Keys whose value could not be read (each reported).
    failed: Vec<&'static str>,
}

impl From<ProfileDef> for ProfileRead {
    fn from(d: ProfileDef) -> Self {
        ProfileRead {
            id: Some(d.id),
            name: d.name,
            sex: Some(d.sex),
            birth_date: d.birth_date,
            age: d.age,
            height: Some(d.height),
            enrolled: Some(d.enrolled),
            withdrew: d.withdrew,
            withdrawal_reason: d.withdrawal_reason,
            groups: d.groups,
            body_fat_percent: d.body_fat_percent,
            targets: d.targets,
            flags: d.flags,
            failed: Vec::new(),
        }
    }
}

/// Reads `profile.yaml`'s keys. When the file reads as a whole that is all; otherwise every
/// key is read on its own so that each key that cannot be read (a misspelt sex, an impossible
/// date, an unknown key, a missing one) is reported, not only the first, and the checks of the
/// keys that were read still run. `None` when the file cannot be read key by key at all
/// (a syntax error, not a mapping).
fn read_profile(text: &str, ctx: &FileCtx, diags: &mut Vec<Diagnostic>) -> Option<ProfileRead> {
    let whole = match crate::yaml::from_str::<ProfileDef>(text, &ctx.file) {
        Ok(def) => return Some(def.into()),
        Err(d) => d,
    };
    // Not a mapping (empty, a list, a syntax error): what the reading as a whole said.
    let Ok(mut f) = crate::yaml::Fields::open(text, &ctx.file) else {
        diags.push(whole.participant(&ctx.participant));
        return None;
    };
    let read = ProfileRead {
        id: f.get("id", true),
        name: f.get::<Option<String>>("name", false).flatten(),
        sex: f.get("sex", true),
        birth_date: f.get::<Option<NaiveDate>>("birth_date", false).flatten(),
        age: f.get::<Option<f64>>("age", false).flatten(),
        height: f.get("height", true),
        enrolled: f.get("enrolled", true),
        withdrew: f.get::<Option<NaiveDate>>("withdrew", false).flatten(),
        withdrawal_reason: f
            .get::<Option<WithdrawalReason>>("withdrawal_reason", false)
            .flatten(),
        groups: f.get("groups", false).unwrap_or_default(),
        body_fat_percent: f.get::<Option<f64>>("body_fat_percent", false).flatten(),
        targets: f.get::<Option<TargetsDef>>("targets", false).flatten(),
        flags: f.get("flags", false).unwrap_or_default(),
        failed: Vec::new(),
    };
    // At most 20 unknown keys: a file with more is not a profile.
    f.unknown_keys(PROFILE_KEYS, 20);
    let mut problems = std::mem::take(&mut f.problems);
    problems.sort_by_key(|d| (d.line.unwrap_or(u64::MAX), d.column.unwrap_or(0)));
    diags.extend(
        problems
            .into_iter()
            .map(|d| d.participant(&ctx.participant)),
    );
    Some(ProfileRead {
        failed: f.failed,
        ..read
    })
}

/// The most characters of a name the reports show (common practice: generous for names of many
/// parts; a longer value is other text pasted into `name:`, and it pushed the report's heading
/// over several pages).
pub const NAME_MAX_CHARS: usize = 100;

/// `name` as the reports show it, and whether it was cut: at most [`NAME_MAX_CHARS`]
/// characters (with the accents that belong to the last one) and then `…`.
fn capped_name(name: &str) -> (String, bool) {
    use unicode_normalization::char::is_combining_mark;
    let mut chars = name.char_indices();
    let Some((cut, _)) = chars.nth(NAME_MAX_CHARS) else {
        return (name.to_string(), false);
    };
    // A combining accent stays with its letter.
    let end = name[cut..]
        .char_indices()
        .find(|&(_, c)| !is_combining_mark(c))
        .map_or(name.len(), |(i, _)| cut + i);
    if end == name.len() {
        return (name.to_string(), false);
    }
    (format!("{}…", name[..end].trim_end()), true)
}

/// Line and column (1-based) of the first thing written in `text` other than blank lines,
/// comments and a `---` document start: where its mapping starts (line 1, column 1 when none).
fn mapping_start(text: &str) -> (u64, u64) {
    for (i, line) in text.lines().enumerate() {
        let t = line.trim_start();
        if t.is_empty() || t.starts_with('#') || line.trim_end() == "---" {
            continue;
        }
        return (
            i as u64 + 1,
            (line.chars().count() - t.chars().count()) as u64 + 1,
        );
    }
    (1, 1)
}

/// Whole years from `birth` to `on` (the one calendar rule every age cut-off uses).
pub use cohortpress_metric_api::whole_years;

/// Parses and checks `profile.yaml` for the folder `folder_id`, in a program whose last day is
/// `program_end`. Returns the profile when it has no errors (warnings may still be pushed).
pub fn parse_profile(
    text: &str,
    folder_id: &str,
    program_targets: &Targets,
    program_end: NaiveDate,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> Option<Profile> {
    let before = diags.len();
    let def = read_profile(text, ctx, diags)?;
    let at = |key: &str, d: Diagnostic| {
        let d = d.field(key);
        match key_line(text, key) {
            // The column of the value after `key:` (1-based, in characters), when one is
            // written on the key's line.
            Some(l) => {
                let col = text.lines().nth(l as usize - 1).and_then(|line| {
                    let (_, after) = line.split_once(':')?;
                    let value = after.trim_start();
                    (!value.is_empty())
                        .then(|| (line.chars().count() - value.chars().count() + 1) as u64)
                });
                d.at(l, col)
            }
            // Not found as `key:` at a line's start (a flow mapping `{id: …}`): at the start of
            // the file's mapping, where a missing key is named too.
            None => {
                let (l, c) = mapping_start(text);
                d.at(l, Some(c))
            }
        }
    };
    if let Some(id) = def.id.as_deref()
        && id != folder_id
    {
        diags.push(at(
            "id",
            ctx.error("the profile id differs from the folder name")
                .expected(format!("`{folder_id}`"))
                .found(format!("`{id}`"))
                .hint("the folder name is the participant id; make them the same"),
        ));
    }
    // An enrolment after the program's last day: `2062-04-01` for `2026-04-01` dropped every
    // row of every file as "before enrolment", and the participant had no report and was left
    // out of the group figures while the run reported only warnings. (Enrolled after a
    // *period's* end but within the program is read: no report for that period, as the README
    // says.) It is the error, at `enrolled`, and no age is computed from it: `enrolled:
    // 9999-12-31` with a birth date read "age at enrolment 8024 is outside the adult range" at
    // `birth_date`.
    let enrolled = match def.enrolled {
        Some(e) if e > program_end => {
            diags.push(at(
                "enrolled",
                ctx.error(format!(
                    "enrolment date {e} is after the program ends ({program_end}); the \
                     participant cannot be used"
                ))
                .expected(format!("an enrolment date on or before {program_end}"))
                .found(e.to_string())
                .hint("check the year; if the program runs longer, change program.end"),
            ));
            None
        }
        e => e,
    };
    // A key whose value could not be read was still given (its problem is reported already).
    let given = |key: &str, read: bool| read || def.failed.contains(&key);
    let age_years = match (
        given("birth_date", def.birth_date.is_some()),
        given("age", def.age.is_some()),
    ) {
        (true, true) => {
            diags.push(at(
                "age",
                ctx.error("both `birth_date` and `age` are given")
                    .expected("exactly one of them")
                    .hint("keep `birth_date` (the age is then computed at enrolment)"),
            ));
            None
        }
        (false, false) => {
            // At the start of the mapping, where serde names a missing key.
            let (l, c) = mapping_start(text);
            diags.push(
                ctx.error("neither `birth_date` nor `age` is given")
                    .expected("`birth_date: YYYY-MM-DD` or `age: 43`")
                    .hint("the energy equations need the participant's age")
                    .at(l, Some(c)),
            );
            None
        }
        _ => match (def.birth_date, def.age, enrolled) {
            (Some(b), None, Some(enrolled)) => {
                if b >= enrolled {
                    diags.push(at(
                        "birth_date",
                        ctx.error("the birth date is not before enrolment")
                            .found(b.to_string()),
                    ));
                    None
                } else {
                    Some(whole_years(b, enrolled) as f64)
                }
            }
            (None, Some(a), _) => Some(a),
            // A date that could not be read (reported where it was read).
            _ => None,
        },
    };
    if let Some(a) = age_years {
        // Common practice: the equations used are adult equations; an age outside 18–110
        // is most likely a typing error.
        if !(18.0..=110.0).contains(&a) {
            let key = if def.age.is_some() {
                "age"
            } else {
                "birth_date"
            };
            // A huge value (`age: 1e308`) is quoted in scientific notation, not with 309 digits.
            let shown = if a.abs() < 1e6 {
                a.to_string()
            } else {
                format!("{a:e}")
            };
            diags.push(at(
                key,
                ctx.error(format!(
                    "age at enrolment {shown} is outside the adult range"
                ))
                .expected("an adult aged 18 to 110 at enrolment")
                .found(shown)
                .hint("this tool's energy equations are for adults; check the value"),
            ));
        }
    }
    let height = match &def.height {
        None => None,
        Some(serde_yaml::Value::String(s)) => match parse_length(s) {
            Ok(h) => Some(h),
            Err(e) => {
                diags.push(at(
                    "height",
                    ctx.error(format!("unreadable height: {}", e.message))
                        .expected("a height with its unit")
                        .found(format!("`{s}`"))
                        .hint(e.hint),
                ));
                None
            }
        },
        Some(serde_yaml::Value::Number(n)) => {
            diags.push(at(
                "height",
                ctx.error("the height has no unit")
                    .expected("a height with its unit")
                    .found(format!("`{n}`"))
                    .hint(bare_height_hint(n.as_f64().unwrap_or(0.0))),
            ));
            None
        }
        Some(other) => {
            diags.push(at(
                "height",
                ctx.error("unreadable height")
                    .expected("a height with its unit such as `168 cm` or `5 ft 6 in`")
                    .found(format!("{other:?}")),
            ));
            None
        }
    };
    if let Some(h) = height
        && !(HEIGHT_CM_RANGE.0..=HEIGHT_CM_RANGE.1).contains(&h.cm())
    {
        diags.push(at(
            "height",
            ctx.error("implausible height")
                .expected(format!("{} to {} cm", HEIGHT_CM_RANGE.0, HEIGHT_CM_RANGE.1))
                .found(format!("{:.1} cm", h.cm()))
                .hint("check the number and its unit"),
        ));
    }
    if let (Some(wd), Some(enrolled)) = (def.withdrew, enrolled)
        && wd < enrolled
    {
        diags.push(at(
            "withdrew",
            ctx.error("the withdrawal date is before enrolment")
                .expected(format!("a date on or after {enrolled}"))
                .found(wd.to_string()),
        ));
    }
    // A reason says what the withdrawal on `withdrew` was; without the day it says nothing,
    // and `stopped_program` alone would read as a withdrawal with no date.
    if given("withdrawal_reason", def.withdrawal_reason.is_some())
        && !given("withdrew", def.withdrew.is_some())
    {
        let found = match def.withdrawal_reason {
            Some(r) => format!("`{}` and no `withdrew`", r.as_str()),
            None => "no `withdrew`".to_string(),
        };
        diags.push(at(
            "withdrawal_reason",
            ctx.error("`withdrawal_reason` is given without `withdrew`")
                .expected("`withdrew: YYYY-MM-DD` with it, or no `withdrawal_reason`")
                .found(found)
                .hint("add the day the participant left as `withdrew:`, or remove `withdrawal_reason` if they did not leave"),
        ));
    }
    let mut groups = BTreeMap::new();
    for (k, v) in &def.groups {
        let text = match v {
            serde_yaml::Value::String(s) => Some(s.clone()),
            serde_yaml::Value::Number(n) => Some(n.to_string()),
            serde_yaml::Value::Bool(b) => Some(b.to_string()),
            _ => None,
        };
        match text {
            Some(t) if !crate::text::neutralise(&t).trim().is_empty() => {
                let t = invisible_checked(&t, &format!("group `{k}`"), "groups", &at, ctx, diags);
                // Composed form (NFC): `Kíln` with a precomposed `í` and with `i` plus a combining
                // accent (as macOS and some keyboards write it) look the same and are one group;
                // compared as written they made one site two sections of the group report.
                use unicode_normalization::UnicodeNormalization;
                groups.insert(k.clone(), t.trim().nfc().collect::<String>());
            }
            _ => diags.push(at(
                "groups",
                ctx.warning(format!("group `{k}` has no usable value; it is ignored"))
                    .expected("a short text such as `North Plant`"),
            )),
        }
    }
    let body_fat_percent = match def.body_fat_percent {
        Some(b) if !(BODY_FAT_RANGE.0..=BODY_FAT_RANGE.1).contains(&b) => {
            diags.push(at(
                "body_fat_percent",
                ctx.warning("implausible body fat; the value is ignored")
                    .expected(format!("{} to {} %", BODY_FAT_RANGE.0, BODY_FAT_RANGE.1))
                    .found(crate::diag::number(b)),
            ));
            None
        }
        b => b,
    };
    // Target overrides: the same ranges as program.yaml's targets.
    if let Some(t) = &def.targets {
        for (key, v, lo, hi) in crate::program::load::target_problems(t) {
            let path = format!("targets.{key}");
            let mut d = ctx
                .error(format!("target out of range: {}", crate::diag::number(v)))
                .field(path.as_str())
                .expected(format!("a number from {lo} to {hi}"))
                .found(crate::diag::number(v))
                .hint("the override replaces the program's target for this participant; check the value or remove it");
            if let Some((l, c)) = crate::program::load::key_position(text, &path) {
                d = d.at(l, c);
            }
            diags.push(d);
        }
    }
    let flags: Vec<String> = def.flags.iter().map(|f| normalise_flag(f)).collect();
    for (written, f) in def.flags.iter().zip(&flags) {
        if !KNOWN_FLAGS.contains(&f.as_str()) {
            diags.push(at(
                "flags",
                ctx.warning(format!(
                    "unknown profile flag `{written}`; it changes nothing in the reports"
                ))
                .expected(
                    KNOWN_FLAGS
                        .iter()
                        .map(|k| format!("`{k}`"))
                        .collect::<Vec<_>>()
                        .join(" or "),
                )
                .found(format!("`{written}`"))
                .hint("check the spelling: a flag the tool does not know cannot add its cautions"),
            ));
        }
    }
    let has_error = diags[before..]
        .iter()
        .any(|d| d.severity == crate::diag::Severity::Error);
    if has_error {
        return None;
    }
    let name = def
        .name
        .as_deref()
        .map(|n| invisible_checked(n, "the name", "name", &at, ctx, diags))
        .filter(|n| !n.trim().is_empty())
        .map(|n| {
            let (shown, cut) = capped_name(n.trim());
            if cut {
                let count = n.trim().chars().count();
                diags.push(at(
                    "name",
                    ctx.warning(format!(
                        "the name is {count} characters long; the reports show its first {NAME_MAX_CHARS} and `…`"
                    ))
                    .expected(format!("a name of at most {NAME_MAX_CHARS} characters"))
                    .found(format!("{count} characters"))
                    .hint("check the value: a name this long is most likely other text pasted into `name:`"),
                ));
            }
            shown
        });
    Some(Profile {
        id: def.id?,
        name,
        sex: def.sex?.sex(),
        birth_date: def.birth_date,
        age_years: age_years?,
        height: height?,
        enrolled: def.enrolled?,
        withdrew: def.withdrew,
        withdrawal_reason: def.withdrawal_reason.unwrap_or_default(),
        groups,
        body_fat_percent,
        targets: def
            .targets
            .as_ref()
            .map_or_else(|| program_targets.clone(), |t| t.apply(program_targets)),
        flags,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::diag::Severity;

    const GOOD: &str = "id: LW-0147
name: Dana Example
sex: female
birth_date: 1983-09-14
height: 5 ft 6 in
enrolled: 2027-03-01
withdrew: 2027-06-20
groups: { site: North Plant, team: 3 }
body_fat_percent: 36
targets: { weight_change_percent: -7 }
flags: [glucose-lowering-medication]
";

    fn parse(text: &str) -> (Option<Profile>, Vec<Diagnostic>) {
        let ctx = FileCtx::new("LW-0147", "participants/LW-0147/profile.yaml");
        let mut d = Vec::new();
        let end = NaiveDate::from_ymd_opt(2027, 12, 31).unwrap();
        let p = parse_profile(text, "LW-0147", &Targets::default(), end, &ctx, &mut d);
        (p, d)
    }

    #[test]
    fn target_overrides_are_checked_like_the_program_targets() {
        let text = GOOD.replace(
            "targets: { weight_change_percent: -7 }",
            "targets:\n  weight_change_percent: -846.9\n  activity_minutes_per_week: .nan\n  weigh_ins_per_week: 4",
        );
        let (p, d) = parse(&text);
        assert!(p.is_none());
        assert_eq!(d.len(), 2, "{d:?}");
        assert_eq!(d[0].field.as_deref(), Some("targets.weight_change_percent"));
        assert_eq!((d[0].line, d[0].column), (Some(11), Some(26)), "{}", d[0]);
        assert_eq!(d[0].found.as_deref(), Some("-846.9"));
        assert_eq!(d[0].expected.as_deref(), Some("a number from -50 to 50"));
        assert_eq!((d[1].line, d[1].column), (Some(12), Some(30)), "{}", d[1]);
        assert_eq!(d[1].found.as_deref(), Some("NaN"));
        // In a flow mapping the column points at the value too.
        let (_, d) = parse(&GOOD.replace("-7 }", "70 }"));
        assert_eq!((d[0].line, d[0].column), (Some(10), Some(35)), "{}", d[0]);
    }

    /// `age: 1e308` was quoted with all 309 digits in the message and its `found`.
    #[test]
    fn a_huge_age_is_quoted_in_scientific_notation() {
        let (p, d) = parse(&GOOD.replace("birth_date: 1983-09-14", "age: 1e308"));
        assert!(p.is_none());
        assert_eq!(d[0].found.as_deref(), Some("1e308"), "{}", d[0]);
        assert_eq!(
            d[0].message,
            "age at enrolment 1e308 is outside the adult range"
        );
        let (_, d) = parse(&GOOD.replace("birth_date: 1983-09-14", "age: 150"));
        assert_eq!(d[0].found.as_deref(), Some("150"), "{}", d[0]);
    }

    #[test]
    fn full_profile() {
        let (p, d) = parse(GOOD);
        assert!(d.is_empty(), "{d:?}");
        let p = p.unwrap();
        assert_eq!(p.age_years, 43.0); // 1983-09-14 → 2027-03-01: 43 whole years
        assert!((p.height.cm() - 167.64).abs() < 1e-9);
        assert_eq!(p.groups["team"], "3");
        assert_eq!(p.targets.weight_change_percent, -7.0);
        assert_eq!(p.targets.activity_minutes_per_week, 150.0);
        assert_eq!(p.flags, vec!["glucose-lowering-medication"]);
        assert_eq!(p.sex, Some(Sex::Female));
    }

    /// A misspelt medication flag used to be kept as written and matched nothing, so the report
    /// lost its medication caution and review without a word.
    #[test]
    fn profile_flags_are_read_whatever_the_spelling_and_unknown_ones_are_named() {
        let (p, d) = parse(&GOOD.replace(
            "flags: [glucose-lowering-medication]",
            "flags: [Glucose_Lowering medication, Pregnancy]",
        ));
        assert_eq!(
            p.unwrap().flags,
            vec!["glucose-lowering-medication", "pregnant"]
        );
        assert!(d.is_empty(), "{d:?}");
        // Breastfeeding, however written, is a known flag (it was "unknown … changes nothing").
        for written in [
            "breastfeeding",
            "Breast feeding",
            "breast-feeding",
            "lactating",
        ] {
            let (p, d) = parse(&GOOD.replace(
                "flags: [glucose-lowering-medication]",
                &format!("flags: [{written}]"),
            ));
            assert_eq!(p.unwrap().flags, vec!["breastfeeding"], "{written}");
            assert!(d.is_empty(), "{written}: {d:?}");
        }
        let (p, d) = parse(&GOOD.replace(
            "flags: [glucose-lowering-medication]",
            "flags: [glucose-lowering-medicine]",
        ));
        assert_eq!(p.unwrap().flags, vec!["glucose-lowering-medicine"]);
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, crate::diag::Severity::Warning);
        assert!(
            d[0].message
                .contains("unknown profile flag `glucose-lowering-medicine`")
        );
    }

    #[test]
    fn whole_years_respects_birthdays() {
        let d = |y, m, dd| NaiveDate::from_ymd_opt(y, m, dd).unwrap();
        assert_eq!(whole_years(d(1980, 3, 1), d(2026, 2, 28)), 45);
        assert_eq!(whole_years(d(1980, 3, 1), d(2026, 3, 1)), 46);
        assert_eq!(whole_years(d(1984, 2, 29), d(2026, 2, 28)), 41);
    }

    #[test]
    fn bare_height_is_an_error_with_hint() {
        let (p, d) = parse(&GOOD.replace("5 ft 6 in", "168"));
        assert!(p.is_none());
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].severity, Severity::Error);
        assert_eq!(d[0].line, Some(5));
        assert!(d[0].hint.as_deref().unwrap().contains("168 cm"), "{}", d[0]);
        let (p, d) = parse(&GOOD.replace("5 ft 6 in", "168 stone"));
        assert!(p.is_none());
        assert!(d[0].message.contains("unknown unit"), "{}", d[0]);
        let (p, d) = parse(&GOOD.replace("5 ft 6 in", "16.8 cm"));
        assert!(p.is_none());
        assert!(d[0].message.contains("implausible height"), "{}", d[0]);
    }

    /// `1e400 cm` was reported as "unknown unit `e`", at a line without a column.
    #[test]
    fn an_out_of_range_height_is_named_with_line_and_column() {
        let (p, d) = parse(&GOOD.replace("5 ft 6 in", "1e400 cm"));
        assert!(p.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(
            d[0].message,
            "unreadable height: `1e400` is out of range (not a finite number)"
        );
        assert_eq!((d[0].line, d[0].column), (Some(5), Some(9)));
        assert_eq!(d[0].found.as_deref(), Some("`1e400 cm`"));
        assert_eq!(d[0].expected.as_deref(), Some("a height with its unit"));
        let (_, d) = parse(&GOOD.replace("5 ft 6 in", "NaN cm"));
        assert!(
            d[0].message.ends_with("`nan` is not a finite number"),
            "{}",
            d[0]
        );
    }

    /// A right-to-left override in a name or a site reordered the report's text around it.
    /// The reader drops such characters and says so where they were written.
    #[test]
    fn invisible_direction_characters_are_dropped_with_a_warning() {
        let text = GOOD
            .replace("name: Dana Example", "name: \"Dana\\u202E Example\\u200F\"")
            .replace("site: North Plant", "site: \"North\\u202B Plant\"");
        assert!(text.contains("\\u202E"), "{text}");
        let (p, d) = parse(&text);
        let p = p.unwrap();
        assert_eq!(p.name.as_deref(), Some("Dana Example"));
        assert_eq!(p.groups["site"], "North Plant");
        assert_eq!(d.len(), 2, "{d:?}");
        assert!(d.iter().all(|x| x.severity == Severity::Warning));
        let name = d
            .iter()
            .find(|x| x.field.as_deref() == Some("name"))
            .unwrap();
        assert_eq!(
            name.message,
            "the name holds invisible direction or control characters (U+202E, U+200F); they are left out of the reports"
        );
        assert_eq!(name.line, Some(2));
        assert!(name.column.is_some());
        let site = d
            .iter()
            .find(|x| x.field.as_deref() == Some("groups"))
            .unwrap();
        assert!(
            site.message.starts_with("group `site` holds"),
            "{}",
            site.message
        );
    }

    /// `Kíln Röw` with precomposed letters and with combining accents (as macOS writes it) look
    /// the same; read as written, the group report showed the one site as two sections of
    /// 11 each, with different figures. Both read as the composed form.
    #[test]
    fn a_group_value_with_combining_accents_reads_as_its_composed_form() {
        let composed = "K\u{ed}ln R\u{f6}w";
        for written in ["K\\u00EDln R\\u00F6w", "Ki\\u0301ln Ro\\u0308w"] {
            let text = GOOD.replace("site: North Plant", &format!("site: \"{written}\""));
            assert!(text.contains(written), "{text}");
            let (p, d) = parse(&text);
            assert_eq!(p.unwrap().groups["site"], composed, "{written}");
            assert!(d.is_empty(), "{d:?}");
        }
    }

    /// A profile with a misspelt sex, an impossible date, a bare height and two unknown keys
    /// was reported one problem per `check`: the first key serde could not read stopped the
    /// reading. Every problem is reported at once, each as it is when it is the only one.
    #[test]
    fn every_problem_of_a_profile_is_reported_at_once() {
        let defects: [(&str, &str); 4] = [
            ("sex: female", "sex: f"),
            ("enrolled: 2027-03-01", "enrolled: 2027-02-30"),
            ("5 ft 6 in", "168"),
            (
                "flags: [glucose-lowering-medication]\n",
                "flags: [glucose-lowering-medication]\nhair: brown\neyes: blue\n",
            ),
        ];
        let mut text = GOOD.to_string();
        for (from, to) in defects {
            text = text.replace(from, to);
        }
        let (p, d) = parse(&text);
        assert!(p.is_none());
        let shown: Vec<String> = d.iter().map(|x| x.to_string()).collect();
        let at: Vec<_> = d.iter().map(|x| (x.line, x.column)).collect();
        assert_eq!(
            at,
            [
                (Some(3), Some(6)),
                (Some(6), Some(11)),
                (Some(12), Some(1)),
                (Some(13), Some(1)),
                (Some(5), Some(9)),
            ],
            "{shown:#?}"
        );
        assert!(
            d.iter().all(|x| x.severity == Severity::Error),
            "{shown:#?}"
        );
        assert_eq!(d[0].found.as_deref(), Some("`f`"));
        assert_eq!(d[1].found.as_deref(), Some("`2027-02-30`"));
        assert_eq!(d[2].found.as_deref(), Some("`hair`"));
        assert_eq!(d[3].found.as_deref(), Some("`eyes`"));
        assert_eq!(d[4].message, "the height has no unit");
        // Each is what the reading says when it is the only problem.
        for (i, (from, to)) in defects.iter().enumerate().take(3) {
            let (_, alone) = parse(&GOOD.replace(from, to));
            assert_eq!(alone.len(), 1, "{alone:?}");
            let j = [0, 1, 4][i];
            assert_eq!(alone[0].to_string(), shown[j]);
        }
        // Not a mapping: what the reading as a whole says, in words (it named our type,
        // "expected struct ProfileDef").
        let (_, d) = parse("- a\n- b\n");
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].message, "sequence where keys and values belong");
        assert_eq!(
            d[0].expected.as_deref(),
            Some("a mapping of keys and values")
        );
        // A missing key and a bad date together; the birth date's check against enrolment
        // is left out while enrolment cannot be read.
        let (_, d) = parse(
            &GOOD
                .replace("sex: female\n", "")
                .replace("2027-03-01", "01/03/2027"),
        );
        assert_eq!(d.len(), 2, "{d:?}");
        assert_eq!(d[0].message, "missing field `sex`");
        assert_eq!(d[0].participant.as_deref(), Some("LW-0147"));
        // The hint names the value for a record that gives neither sex.
        assert_points_to_unrecorded(&d[0]);
        assert_eq!(
            (d[1].line, d[1].found.as_deref()),
            (Some(5), Some("`01/03/2027`"))
        );
        // `age` and an unreadable `birth_date`: both were given, which is its own problem.
        let (_, d) =
            parse(&GOOD.replace("birth_date: 1983-09-14", "birth_date: 1983-13-14\nage: 43"));
        assert_eq!(d.len(), 2, "{d:?}");
        assert!(d[0].message.contains("not a valid date"), "{}", d[0]);
        assert!(d[1].message.contains("both"), "{}", d[1]);
    }

    /// A name of 3,000 letters filled page 1 of the PDF and ran over its footer. The reports
    /// show its first 100 characters and `…`, with a warning at the name.
    #[test]
    fn a_very_long_name_is_cut_with_a_warning() {
        let long = "W".repeat(3000);
        let (p, d) = parse(&GOOD.replace("Dana Example", &long));
        assert_eq!(
            p.unwrap().name.as_deref(),
            Some(format!("{}…", "W".repeat(100)).as_str())
        );
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, Severity::Warning);
        assert_eq!(
            d[0].message,
            "the name is 3000 characters long; the reports show its first 100 and `…`"
        );
        assert_eq!((d[0].line, d[0].column), (Some(2), Some(7)));
        assert_eq!(d[0].found.as_deref(), Some("3000 characters"));
        assert_eq!(
            d[0].expected.as_deref(),
            Some("a name of at most 100 characters")
        );
        // 100 characters is shown whole; an accent after the 100th stays with its letter.
        let hundred = "Ab".repeat(50);
        let (p, d) = parse(&GOOD.replace("Dana Example", &hundred));
        assert_eq!(p.unwrap().name.as_deref(), Some(hundred.as_str()));
        assert!(d.is_empty(), "{d:?}");
        let accented = format!("{}e\\u0301", "a".repeat(99));
        let (p, d) = parse(&GOOD.replace("Dana Example", &format!("\"{accented}\"")));
        assert_eq!(p.unwrap().name.unwrap().chars().count(), 101, "{d:?}");
        assert!(d.is_empty(), "{d:?}");
        let (p, _) = parse(&GOOD.replace("Dana Example", &format!("\"{accented} Z\"")));
        assert_eq!(
            p.unwrap().name.unwrap(),
            format!("{}e\u{301}…", "a".repeat(99))
        );
    }

    #[test]
    fn unknown_key_is_named_with_line() {
        let (p, d) = parse(&format!("{GOOD}hair: brown\n"));
        assert!(p.is_none());
        assert_eq!(d[0].line, Some(12));
        assert_eq!(d[0].found.as_deref(), Some("`hair`"));
        assert_eq!(d[0].participant.as_deref(), Some("LW-0147"));
    }

    #[test]
    fn age_rules() {
        let (p, d) = parse(&GOOD.replace("birth_date: 1983-09-14", "age: 43"));
        assert!(d.is_empty());
        assert_eq!(p.unwrap().age_years, 43.0);
        let (p, d) =
            parse(&GOOD.replace("birth_date: 1983-09-14", "birth_date: 1983-09-14\nage: 43"));
        assert!(p.is_none());
        assert!(d[0].message.contains("both"));
        let (p, d) = parse(&GOOD.replace("birth_date: 1983-09-14\n", ""));
        assert!(p.is_none());
        assert!(d[0].message.contains("neither"));
        // At the start of the file's mapping (an error always has a line).
        assert_eq!((d[0].line, d[0].column), (Some(1), Some(1)), "{}", d[0]);
        let (_, d) = parse(&format!(
            "# profile\n\n{}",
            GOOD.replace("birth_date: 1983-09-14\n", "")
        ));
        assert_eq!((d[0].line, d[0].column), (Some(3), Some(1)), "{}", d[0]);
        // A flow mapping: keys not at a line's start are placed at the mapping's start.
        let (_, d) =
            parse("{id: LW-0148, sex: female, age: 43, height: 168 cm, enrolled: 2027-03-01}\n");
        assert_eq!(d.len(), 1, "{d:?}");
        assert!(d[0].message.contains("differs from the folder"), "{}", d[0]);
        assert_eq!(d[0].line, Some(1), "{}", d[0]);
        let (p, _) = parse(&GOOD.replace("birth_date: 1983-09-14", "age: 7"));
        assert!(p.is_none());
    }

    /// `enrolled: 9999-12-31` beside a birth date read "age at enrolment 8016 is outside the
    /// adult range" at `birth_date`; it is now the enrolment date's error, at its own line and
    /// column, with what was expected (a day on or before the program's last, here 2027-12-31).
    #[test]
    fn an_enrolment_after_the_program_is_the_enrolment_dates_error_not_an_age() {
        for date in ["9999-12-31", "2028-01-01"] {
            let (p, d) = parse(&GOOD.replace("enrolled: 2027-03-01", &format!("enrolled: {date}")));
            assert!(p.is_none());
            assert_eq!(d.len(), 1, "{d:#?}");
            let e = &d[0];
            assert_eq!(
                (
                    e.severity,
                    e.line,
                    e.column,
                    e.field.as_deref(),
                    e.expected.as_deref(),
                    e.found.as_deref()
                ),
                (
                    Severity::Error,
                    Some(6),
                    Some(11),
                    Some("enrolled"),
                    Some("an enrolment date on or before 2027-12-31"),
                    Some(date)
                )
            );
            assert_eq!(
                e.message,
                format!(
                    "enrolment date {date} is after the program ends (2027-12-31); the \
                     participant cannot be used"
                )
            );
        }
        // On the program's last day: read, with the age at that day.
        let (p, d) = parse(
            &GOOD
                .replace("enrolled: 2027-03-01", "enrolled: 2027-12-31")
                .replace("withdrew: 2027-06-20\n", ""),
        );
        assert!(d.is_empty(), "{d:#?}");
        assert_eq!(p.unwrap().age_years, 44.0);
    }

    /// A missing or unknown `sex` is pointed to `sex: unrecorded` for a record that gives
    /// neither value.
    fn assert_points_to_unrecorded(d: &Diagnostic) {
        assert!(
            d.hint
                .as_deref()
                .unwrap()
                .contains("or `sex: unrecorded` when it gives neither"),
            "{d}"
        );
    }

    #[test]
    fn other_profile_errors() {
        let (p, d) = parse(&GOOD.replace("id: LW-0147", "id: LW-0148"));
        assert!(p.is_none());
        assert_eq!((d[0].line, d[0].field.as_deref()), (Some(1), Some("id")));
        let (p, d) = parse(&GOOD.replace("withdrew: 2027-06-20", "withdrew: 2027-01-20"));
        assert!(p.is_none());
        assert_eq!(d[0].line, Some(7));
        let (p, d) = parse(&GOOD.replace("sex: female", "sex: f"));
        assert!(p.is_none());
        assert!(
            d[0].expected.as_deref().unwrap().contains("female"),
            "{}",
            d[0]
        );
        // A record's third value (`x`, `nonbinary`, `diverse`) is pointed to `unrecorded`.
        let (p, d) = parse(&GOOD.replace("sex: female", "sex: nonbinary"));
        assert!(p.is_none());
        assert_eq!(
            d[0].expected.as_deref(),
            Some("one of `female`, `male`, `unrecorded`")
        );
        assert_points_to_unrecorded(&d[0]);
        let (p, d) = parse(&GOOD.replace("enrolled: 2027-03-01", "enrolled: 2027-02-30"));
        assert!(p.is_none());
        assert_eq!(d[0].line, Some(6));
    }

    /// `withdrew:` alone read as withdrawn consent, with no way to say that someone only
    /// stopped the program. `withdrawal_reason` says which; the default is consent.
    #[test]
    fn the_withdrawal_reason_is_read_and_defaults_to_consent() {
        let (p, d) = parse(GOOD);
        assert!(d.is_empty(), "{d:?}");
        let p = p.unwrap();
        assert_eq!(p.withdrawal_reason, WithdrawalReason::Consent);
        assert!(!p.follow_up_weigh_ins());
        let stopped = GOOD.replace(
            "withdrew: 2027-06-20\n",
            "withdrew: 2027-06-20\nwithdrawal_reason: stopped_program\n",
        );
        let (p, d) = parse(&stopped);
        assert!(d.is_empty(), "{d:?}");
        let p = p.unwrap();
        assert_eq!(p.withdrawal_reason, WithdrawalReason::StoppedProgram);
        assert!(p.follow_up_weigh_ins());
        let (p, d) = parse(&stopped.replace("stopped_program", "consent"));
        assert!(d.is_empty(), "{d:?}");
        assert_eq!(p.unwrap().withdrawal_reason, WithdrawalReason::Consent);
    }

    #[test]
    fn an_unknown_withdrawal_reason_is_a_located_error() {
        let (p, d) = parse(&GOOD.replace(
            "withdrew: 2027-06-20\n",
            "withdrew: 2027-06-20\nwithdrawal_reason: moved away\n",
        ));
        assert!(p.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, Severity::Error);
        assert_eq!(d[0].file, "participants/LW-0147/profile.yaml");
        assert_eq!((d[0].line, d[0].column), (Some(8), Some(20)), "{}", d[0]);
        assert_eq!(d[0].found.as_deref(), Some("`moved away`"), "{}", d[0]);
        assert_eq!(
            d[0].expected.as_deref(),
            Some("`consent` or `stopped_program`"),
            "{}",
            d[0]
        );
        assert_eq!(
            d[0].message,
            "unknown variant `moved away`, expected `consent` or `stopped_program`"
        );
        assert_eq!(d[0].field.as_deref(), Some("withdrawal_reason"));
    }

    #[test]
    fn a_withdrawal_reason_without_withdrew_is_a_located_error() {
        let (p, d) = parse(&GOOD.replace(
            "withdrew: 2027-06-20\n",
            "withdrawal_reason: stopped_program\n",
        ));
        assert!(p.is_none());
        assert_eq!(d.len(), 1, "{d:?}");
        assert_eq!(d[0].severity, Severity::Error);
        assert_eq!(d[0].file, "participants/LW-0147/profile.yaml");
        assert_eq!(
            d[0].message,
            "`withdrawal_reason` is given without `withdrew`"
        );
        assert_eq!(d[0].field.as_deref(), Some("withdrawal_reason"));
        assert_eq!((d[0].line, d[0].column), (Some(7), Some(20)), "{}", d[0]);
        assert_eq!(
            d[0].found.as_deref(),
            Some("`stopped_program` and no `withdrew`")
        );
        assert_eq!(
            d[0].expected.as_deref(),
            Some("`withdrew: YYYY-MM-DD` with it, or no `withdrawal_reason`")
        );
        // `consent` without a day is refused too: it would say nothing.
        let (p, d) = parse(&GOOD.replace("withdrew: 2027-06-20\n", "withdrawal_reason: consent\n"));
        assert!(p.is_none());
        assert_eq!(d[0].found.as_deref(), Some("`consent` and no `withdrew`"));
    }

    #[test]
    fn implausible_body_fat_is_dropped_with_a_warning() {
        let (p, d) = parse(&GOOD.replace("body_fat_percent: 36", "body_fat_percent: 90"));
        assert_eq!(d.len(), 1);
        assert_eq!(d[0].severity, Severity::Warning);
        assert_eq!(p.unwrap().body_fat_percent, None);
    }
}

/// `text` (the value of `key`, described as `what`) without its invisible direction and control
/// characters (`crate::text`), with a warning naming them when there were any: the reports
/// would drop them anyway, and a name or site that reorders the text around it is worth a look.
fn invisible_checked(
    text: &str,
    what: &str,
    key: &str,
    at: &dyn Fn(&str, Diagnostic) -> Diagnostic,
    ctx: &FileCtx,
    diags: &mut Vec<Diagnostic>,
) -> String {
    let found: Vec<String> = text
        .chars()
        .filter(|&c| crate::text::is_invisible_control(c))
        .map(|c| format!("U+{:04X}", c as u32))
        .collect();
    if !found.is_empty() {
        diags.push(at(
            key,
            ctx.warning(format!(
                "{what} holds invisible direction or control characters ({}); they are left out of the reports",
                found.join(", ")
            ))
            .expected("letters, digits, spaces and punctuation")
            .found(format!("`{}`", text.escape_default()))
            .hint("retype the value, or copy it from a source that does not add direction marks"),
        ));
    }
    crate::text::neutralise(text).into_owned()
}

/// Hint for a height written without a unit: suggest the unit the number most plausibly has
/// (a number over 100 is centimetres, 48–96 inches, a small one metres), never an absurd one.
fn bare_height_hint(n: f64) -> String {
    if n >= 100.0 {
        format!("write e.g. `height: {n} cm`")
    } else if n >= 48.0 {
        format!("write e.g. `height: {n} in` (or in cm)")
    } else if n > 0.0 && n < 3.0 {
        format!("write e.g. `height: {n} m`")
    } else {
        "write the height with its unit, e.g. `168 cm`, `1.68 m`, `5 ft 6 in` or `66 in`".into()
    }
}

#[cfg(test)]
mod bare_height_tests {
    use super::bare_height_hint;

    #[test]
    fn the_hint_names_a_plausible_unit() {
        assert_eq!(bare_height_hint(172.0), "write e.g. `height: 172 cm`");
        assert_eq!(
            bare_height_hint(66.0),
            "write e.g. `height: 66 in` (or in cm)"
        );
        assert_eq!(bare_height_hint(1.72), "write e.g. `height: 1.72 m`");
        assert!(bare_height_hint(20.0).contains("5 ft 6 in"));
    }
}

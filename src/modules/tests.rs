//! Unit tests of the registry and the runner, with small in-process modules written here.

use super::registry::build_with;
use super::run::without_follow_up;
use super::*;
use crate::diag::{Diagnostic, Severity};
use crate::program::{Program, ProgramDef};
use chrono::NaiveDate;
use cohortpress_metric_api::units::{Length, Mass};
use cohortpress_metric_api::{
    MetricModule, ModuleContext, ModuleError, ModuleOutput, ModuleSpec, OutputSpec,
    ParticipantData, Period, Profile, ProgramInfo, SettingKind, SettingSpec, Sex, Targets,
    UnitSystem, WeighIn,
};
use std::collections::BTreeMap;
use std::path::PathBuf;

/// What a test module does when asked to compute.
#[derive(Clone, Copy)]
enum Act {
    /// Returns `count` = number of weigh-ins × `factor` setting, plus `seen` = how many earlier
    /// outputs it was given.
    Count,
    /// Fails with a message.
    Fail,
    /// Panics.
    Panic,
    /// Fails for participant `P2` only.
    FailForP2,
}

struct TestModule {
    id: &'static str,
    requires: Vec<String>,
    act: Act,
}

impl TestModule {
    fn boxed(id: &'static str, requires: &[&str], act: Act) -> Box<dyn MetricModule> {
        Box::new(TestModule {
            id,
            requires: requires.iter().map(|s| s.to_string()).collect(),
            act,
        })
    }
}

impl MetricModule for TestModule {
    fn spec(&self) -> ModuleSpec {
        ModuleSpec {
            id: self.id.into(),
            version: "1.2.3".into(),
            description: format!("test module {}", self.id),
            settings: vec![
                SettingSpec {
                    name: "factor".into(),
                    kind: SettingKind::Number,
                    default: serde_json::json!(1.0),
                    unit: String::new(),
                    choices: vec![],
                    min: Some(0.0),
                    max: Some(10.0),
                    description: "multiplies the count".into(),
                },
                SettingSpec {
                    name: "mode".into(),
                    kind: SettingKind::Text,
                    default: serde_json::json!("plain"),
                    unit: String::new(),
                    choices: vec!["plain".into(), "fancy".into()],
                    min: None,
                    max: None,
                    description: "how to count".into(),
                },
            ],
            outputs: vec![OutputSpec {
                name: "count".into(),
                kind: "scalar".into(),
                unit: String::new(),
                description: "weigh-ins".into(),
                whole: true,
                codes: Vec::new(),
            }],
            requires: self.requires.clone(),
        }
    }

    fn compute(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError> {
        match self.act {
            Act::Fail => return Err(ModuleError::new("cannot count today")),
            Act::Panic => panic!("index out of range in {}", self.id),
            Act::FailForP2 if data.profile.id == "P2" => {
                return Err(ModuleError::new("P2 is not countable"));
            }
            _ => {}
        }
        let mut out = ModuleOutput::default();
        let n = data.weights.len() as f64 * ctx.setting_f64("factor", f64::NAN);
        out.push_scalar("count", Some(n), "", "count");
        out.push_scalar(
            "seen",
            Some(ctx.earlier.len() as f64),
            "",
            "earlier outputs",
        );
        Ok(out)
    }
}

fn builtins() -> Vec<Box<dyn MetricModule>> {
    vec![
        TestModule::boxed("alpha", &[], Act::Count),
        TestModule::boxed("beta", &["alpha"], Act::Count),
        TestModule::boxed("failing", &[], Act::Fail),
        TestModule::boxed("panicky", &[], Act::Panic),
        TestModule::boxed("picky", &[], Act::FailForP2),
        TestModule::boxed("gamma", &["picky"], Act::Count),
        TestModule::boxed("addon", &["extra"], Act::Count),
    ]
}

/// A program whose `modules:` section is `modules_yaml`; entry i is said to be on line 10 + i.
fn program(modules_yaml: &str) -> Program {
    let text = format!(
        "format_version: 1\nprogram: {{id: p, title: T, start: 2027-01-01, end: 2027-12-31}}\n\
         modules:\n{modules_yaml}"
    );
    let def: ProgramDef = serde_yaml::from_str(&text).expect("test program parses");
    let module_lines = (0..def.modules.len()).map(|i| (i, 10 + i as u64)).collect();
    Program {
        root: PathBuf::from("."),
        info: info(),
        def,
        module_lines,
        underweight_line: None,
        source: String::new(),
    }
}

fn info() -> ProgramInfo {
    ProgramInfo {
        id: "p".into(),
        title: "T".into(),
        start: day(1, 1),
        end: day(12, 31),
        units: UnitSystem::Metric,
        targets: Targets::default(),
    }
}

fn day(m: u32, d: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(2027, m, d).unwrap()
}

fn participant(id: &str, weigh_ins: usize) -> ParticipantData {
    ParticipantData {
        profile: Profile {
            id: id.into(),
            name: None,
            sex: Some(Sex::Female),
            birth_date: None,
            age_years: 40.0,
            height: Length::from_cm(165.0),
            enrolled: day(1, 1),
            withdrew: None,
            withdrawal_reason: Default::default(),
            groups: BTreeMap::new(),
            body_fat_percent: None,
            targets: Targets::default(),
            flags: vec![],
        },
        weights: (0..weigh_ins)
            .map(|i| WeighIn {
                date: day(3, 1 + i as u32),
                time: None,
                weight: Mass::from_kg(90.0 - i as f64 * 0.1),
                source: None,
            })
            .collect(),
        intake: vec![],
        activity: vec![],
        sessions: vec![],
        labs: vec![],
    }
}

fn build(yaml: &str) -> Result<(ModuleSet, Vec<Diagnostic>), Vec<Diagnostic>> {
    build_with(&program(yaml), builtins())
}

fn errors(diags: &[Diagnostic]) -> Vec<&Diagnostic> {
    diags
        .iter()
        .filter(|d| d.severity == Severity::Error)
        .collect()
}

fn run(set: &ModuleSet, p: &ParticipantData) -> ModuleResults {
    set.run(
        &info(),
        Period {
            from: day(3, 1),
            to: day(3, 31),
        },
        day(4, 2),
        p,
    )
}

#[test]
fn modules_keep_program_order_and_defaults_are_filled_in() {
    let (set, warnings) =
        build("  - id: picky\n  - id: alpha\n    with: {factor: 2.5}\n  - id: beta\n").unwrap();
    assert!(warnings.is_empty(), "{warnings:?}");
    assert_eq!(set.ids(), ["picky", "alpha", "beta"]);
    assert_eq!(
        set.settings("alpha").unwrap(),
        &serde_json::json!({"factor": 2.5, "mode": "plain"})
    );
    assert_eq!(
        set.settings("beta").unwrap(),
        &serde_json::json!({"factor": 1.0, "mode": "plain"})
    );
    assert_eq!(set.specs()[2].requires, ["alpha"]);
}

#[test]
fn a_requirement_listed_later_is_an_error_naming_both() {
    let errs = build("  - id: beta\n  - id: alpha\n").unwrap_err();
    let errs = errors(&errs);
    assert_eq!(errs.len(), 1, "{errs:?}");
    assert_eq!(
        errs[0].message,
        "module `beta` requires `alpha`, which comes after it in `modules:`"
    );
    assert_eq!(errs[0].line, Some(10));
    assert_eq!(errs[0].field.as_deref(), Some("modules[0].id"));
    assert!(
        errs[0]
            .hint
            .as_deref()
            .unwrap()
            .contains("move `alpha` above `beta`")
    );
}

#[test]
fn a_missing_requirement_is_an_error_with_the_fix() {
    let errs = build("  - id: picky\n  - id: beta\n").unwrap_err();
    let errs = errors(&errs);
    assert_eq!(errs.len(), 1, "{errs:?}");
    assert_eq!(
        errs[0].message,
        "module `beta` requires `alpha`, which is not in `modules:`"
    );
    assert_eq!(errs[0].line, Some(11));
    assert_eq!(
        errs[0].hint.as_deref(),
        Some("add `- id: alpha` to `modules:` before `beta`")
    );
}

#[test]
fn every_settings_problem_is_reported_on_its_entry() {
    let errs =
        build("  - id: alpha\n  - id: beta\n    with: {factor: 12, mode: loud, colour: red}\n")
            .unwrap_err();
    let errs = errors(&errs);
    assert_eq!(errs.len(), 3, "{errs:?}");
    for e in &errs {
        assert_eq!(e.file, "program.yaml");
        assert_eq!(e.line, Some(11));
        // Each names its setting.
        let setting = e.message.split('`').nth(1).unwrap();
        assert_eq!(
            e.field.as_deref(),
            Some(format!("modules[1].with.{setting}").as_str())
        );
    }
    let text: Vec<&str> = errs.iter().map(|e| e.message.as_str()).collect();
    assert!(
        text.iter()
            .any(|m| m.contains("unknown setting `colour` for module `beta`")),
        "{text:?}"
    );
    assert!(
        text.iter().any(|m| m.contains("12 is outside 0..=10")),
        "{text:?}"
    );
    assert!(
        text.iter()
            .any(|m| m.contains("`loud` is not one of: plain, fancy")),
        "{text:?}"
    );
}

#[test]
fn settings_that_are_not_a_mapping_are_refused() {
    let errs = build("  - id: alpha\n    with: [1, 2]\n").unwrap_err();
    assert_eq!(
        errors(&errs)[0].message,
        "expected a mapping of settings, found a list"
    );
}

#[test]
fn unknown_and_duplicate_ids_are_errors() {
    let errs = build("  - id: alpha\n  - id: delta\n  - id: alpha\n").unwrap_err();
    let errs = errors(&errs);
    assert_eq!(errs.len(), 2, "{errs:?}");
    assert_eq!(errs[0].message, "unknown module `delta`");
    assert!(
        errs[0]
            .expected
            .as_deref()
            .unwrap()
            .contains("alpha, beta, failing")
    );
    assert!(errs[0].hint.as_deref().unwrap().contains("`command:`"));
    assert_eq!(errs[1].message, "module `alpha` is listed twice");
    assert_eq!(errs[1].found.as_deref(), Some("entries 1 and 3"));
}

#[test]
fn a_builtin_with_external_keys_only_warns() {
    let (set, warnings) = build("  - id: alpha\n    timeout_seconds: 5\n").unwrap();
    assert_eq!(set.ids(), ["alpha"]);
    assert_eq!(warnings.len(), 1);
    assert!(
        warnings[0]
            .message
            .contains("ignored for the built-in module `alpha`")
    );
}

#[test]
fn an_external_module_cannot_take_a_builtin_id() {
    let errs = build("  - id: alpha\n    command: [./alpha.py]\n").unwrap_err();
    assert!(
        errors(&errs)[0]
            .message
            .contains("is the id of a built-in module")
    );
}

#[test]
fn a_missing_external_program_is_an_error_unless_optional() {
    let errs = build("  - id: extra\n    command: [./no-such-module.py]\n").unwrap_err();
    let errs = errors(&errs);
    assert_eq!(
        errs[0].message,
        "external module `extra`: program `./no-such-module.py` was not found"
    );
    let hint = errs[0].hint.as_deref().unwrap();
    assert!(
        hint.contains("install it") && hint.contains("optional: true"),
        "{hint}"
    );

    let (set, warnings) = build(
        "  - id: alpha\n  - id: extra\n    command: [./no-such-module.py]\n    optional: true\n",
    )
    .unwrap();
    assert_eq!(set.ids(), ["alpha"]);
    assert_eq!(warnings.len(), 1);
    assert!(
        warnings[0].message.contains("`extra` is skipped"),
        "{:?}",
        warnings[0]
    );
    assert_eq!(warnings[0].line, Some(11));
}

#[test]
fn a_module_requiring_a_skipped_optional_module_is_skipped_too() {
    let (set, warnings) = build(
        "  - id: extra\n    command: [./no-such-module.py]\n    optional: true\n  - id: addon\n  \
         - id: alpha\n",
    )
    .unwrap();
    assert_eq!(set.ids(), ["alpha"]);
    assert_eq!(warnings.len(), 2, "{warnings:?}");
    assert_eq!(
        warnings[1].message,
        "module `addon` is skipped because it requires `extra`, which was skipped"
    );
    assert_eq!(warnings[1].line, Some(11));
}

#[test]
fn each_module_sees_the_outputs_before_it() {
    let (set, _) = build("  - id: alpha\n    with: {factor: 3}\n  - id: beta\n").unwrap();
    let r = run(&set, &participant("P1", 4));
    assert!(r.failures.is_empty(), "{:?}", r.failures);
    assert_eq!(r.output("alpha").unwrap().scalar("count"), Some(12.0));
    assert_eq!(r.output("alpha").unwrap().scalar("seen"), Some(0.0));
    assert_eq!(r.output("beta").unwrap().scalar("count"), Some(4.0));
    assert_eq!(r.output("beta").unwrap().scalar("seen"), Some(1.0));
    let order: Vec<&str> = r.outputs.iter().map(|(id, _)| id.as_str()).collect();
    assert_eq!(order, ["alpha", "beta"]);
}

#[test]
fn failures_and_panics_are_contained_to_their_module() {
    let (set, _) =
        build("  - id: failing\n  - id: panicky\n  - id: alpha\n  - id: beta\n").unwrap();
    let r = run(&set, &participant("P1", 2));
    assert_eq!(
        r.failures,
        vec![
            ModuleFailure {
                module: "failing".into(),
                message: "cannot count today".into()
            },
            ModuleFailure {
                module: "panicky".into(),
                message:
                    "internal error in the module (it panicked: index out of range in panicky)"
                        .into()
            },
        ]
    );
    assert_eq!(r.output("beta").unwrap().scalar("count"), Some(2.0));
}

#[test]
fn a_failure_for_one_participant_skips_its_dependants_for_that_participant_only() {
    let (set, _) = build("  - id: picky\n  - id: gamma\n  - id: alpha\n").unwrap();
    let p1 = run(&set, &participant("P1", 3));
    assert!(p1.failures.is_empty());
    assert_eq!(p1.output("gamma").unwrap().scalar("count"), Some(3.0));

    let p2 = run(&set, &participant("P2", 3));
    assert_eq!(
        p2.failures,
        vec![
            ModuleFailure {
                module: "picky".into(),
                message: "P2 is not countable".into()
            },
            ModuleFailure {
                module: "gamma".into(),
                message: "skipped: needs picky".into()
            },
        ]
    );
    assert_eq!(p2.output("alpha").unwrap().scalar("count"), Some(3.0));
}

#[test]
fn the_fingerprint_changes_with_settings_and_order_only() {
    let fp = |y: &str| build(y).unwrap().0.settings_fingerprint();
    let a = fp("  - id: alpha\n    with: {mode: plain, factor: 2}\n  - id: picky\n");
    assert_eq!(
        a,
        "alpha 1.2.3 builtin {\"factor\":2,\"mode\":\"plain\"}\n\
         picky 1.2.3 builtin {\"factor\":1.0,\"mode\":\"plain\"}\n"
    );
    // Writing a default explicitly or in another key order changes nothing …
    assert_eq!(
        a,
        fp("  - id: alpha\n    with: {factor: 2}\n  - id: picky\n    with: {mode: plain}\n")
    );
    // … a different value or order does.
    assert_ne!(
        a,
        fp("  - id: alpha\n    with: {factor: 3}\n  - id: picky\n")
    );
    assert_ne!(
        a,
        fp("  - id: picky\n  - id: alpha\n    with: {factor: 2}\n")
    );
}

#[test]
fn the_listing_names_settings_with_units_and_ranges() {
    let text = describe_modules(None);
    assert!(text.starts_with("Built-in modules\n"));
    for m in builtin_modules() {
        let spec = m.spec();
        assert!(
            text.contains(&format!("\n{} {}", spec.id, spec.version)),
            "{}",
            spec.id
        );
        for s in &spec.settings {
            assert!(text.contains(&format!("    {}: ", s.name)), "{}", s.name);
        }
    }
}

#[test]
fn builtin_ids_are_unique_and_requirements_come_first() {
    let mut seen: Vec<String> = Vec::new();
    for m in builtin_modules() {
        let spec = m.spec();
        for r in &spec.requires {
            assert!(
                seen.contains(r),
                "{} requires {r}, listed after it",
                spec.id
            );
        }
        assert!(!seen.contains(&spec.id));
        seen.push(spec.id);
    }
}

#[test]
fn command_words_with_absolute_paths_are_shown_by_file_name() {
    use super::registry::shown_command_word as shown;
    assert_eq!(shown("/home/ana/bin/steps.py"), "…/steps.py");
    assert_eq!(shown("~/modules/steps.py"), "…/steps.py");
    assert_eq!(shown("--config=/home/ana/cfg.json"), "--config=…/cfg.json");
    assert_eq!(shown("C:\\Users\\ana\\steps.exe"), "…/steps.exe");
    assert_eq!(shown("/opt/mods/"), "…/mods");
    // As written: bare names, relative paths, options without a path.
    assert_eq!(shown("python3"), "python3");
    assert_eq!(shown("plugins/steps.py"), "plugins/steps.py");
    assert_eq!(shown("../mods/steps.py"), "../mods/steps.py");
    assert_eq!(shown("--goal=8000"), "--goal=8000");
}

/// `energy`'s floor raised to 1,400 alone: the report's cautions would name 1,400 while the
/// clinician's low-intake flag (the `outcomes` module's floor) stayed at 1,200. The two must
/// agree; equal values, or defaults on both, are fine.
#[test]
fn the_two_modules_intake_floors_must_agree() {
    let real = |yaml: &str| build_with(&program(yaml), super::registry::builtin_modules());
    let base = "  - id: trend\n  - id: energy\n    with: { intake_floor_female: 1400 }\n";
    let errs = real(&format!("{base}  - id: outcomes\n")).unwrap_err();
    let errs = errors(&errs);
    assert_eq!(errs.len(), 1, "{errs:?}");
    assert_eq!(
        errs[0].message,
        "`intake_floor_female` differs between the `energy` module (1400) and the `outcomes` module (1200)"
    );
    assert_eq!(errs[0].line, Some(12));
    assert_eq!(errs[0].found.as_deref(), Some("1200"));
    assert!(
        real(&format!(
            "{base}  - id: outcomes\n    with: {{ intake_floor_female: 1400 }}\n"
        ))
        .is_ok()
    );
    assert!(real("  - id: trend\n  - id: energy\n  - id: outcomes\n").is_ok());
}

/// `outcomes` reads `energy`'s results when both run: listed first, its energy-based clinical
/// flags could never be raised. Without `energy` it is fine.
#[test]
fn outcomes_listed_before_energy_is_an_error() {
    let real = |yaml: &str| build_with(&program(yaml), super::registry::builtin_modules());
    let errs = real("  - id: trend\n  - id: outcomes\n  - id: energy\n").unwrap_err();
    let errs = errors(&errs);
    assert_eq!(errs.len(), 1, "{errs:?}");
    assert!(
        errs[0]
            .message
            .starts_with("module `outcomes` comes before `energy`"),
        "{}",
        errs[0].message
    );
    assert_eq!(errs[0].line, Some(11));
    assert!(real("  - id: trend\n  - id: outcomes\n").is_ok());
    assert!(real("  - id: trend\n  - id: energy\n  - id: outcomes\n").is_ok());
}

/// The outputs keep cohortpress's description of an external module's failure and leave out
/// its own words and any path; a built-in module's message is kept whole.
#[test]
fn an_external_failure_is_written_in_the_outputs_without_the_modules_words_or_paths() {
    let f = |message: &str| {
        ModuleFailure {
            module: "m".into(),
            message: message.into(),
        }
        .for_outputs()
    };
    let tail = " (the run log has the details)";
    for (message, kept) in [
        (
            "external module: reported an error: cannot open /home/ana/x.csv",
            "external module: reported an error",
        ),
        (
            "external module: exited with status 3; its last error line: `File /home/ana/m.py`",
            "external module: exited with status 3",
        ),
        (
            "external module: program `/home/ana/plugins/m.py` was not found",
            "external module: program `…` was not found",
        ),
        (
            "external module: cannot start `/opt/m`: permission denied; make it executable",
            "external module: cannot start `…`",
        ),
        (
            "external module: cannot create an empty working folder for it in /tmp/ana: denied",
            "external module: cannot create an empty working folder for it in …",
        ),
        (
            "external module: did not finish within 2 s and was stopped; if it needs longer",
            "external module: did not finish within 2 s and was stopped",
        ),
    ] {
        assert_eq!(f(message), format!("{kept}{tail}"), "{message}");
    }
    assert_eq!(f("skipped: needs trend"), "skipped: needs trend");
    assert_eq!(f("cannot count today"), "cannot count today");
}

/// Someone who stopped the program on day 70 of the fixture's twelve weeks and weighed in as
/// follow-up to day 83, 2 kg lower. The energy module set logs that end on day 70 against a
/// trend that ran on to day 83 (an implied intake, an intake gap, a 28-day energy use from a
/// trend the logs never saw). It is now given the records up to day 70 only, the trend on them
/// included: exactly what it gives after a withdrawal of consent on the same day. The trend
/// and the outcomes still see the follow-up weigh-ins (the time point's weight, ITT).
#[test]
fn energy_is_given_the_records_up_to_the_withdrawal_day_only_after_stopping_the_program() {
    use cohortpress_metric_api::{WithdrawalReason, fixture};
    use cohortpress_metric_energy::view::EnergyView;
    use cohortpress_metric_outcomes::view::OutcomesView;
    use cohortpress_metric_trend::view::TrendView;
    let prog = program("  - id: trend\n  - id: energy\n  - id: adherence\n  - id: outcomes\n");
    let (set, diags) = build_with(&prog, registry::builtin_modules()).expect("builds");
    assert!(errors(&diags).is_empty(), "{diags:?}");
    let left = fixture::start() + chrono::Duration::days(70);
    let mut stopped = fixture::participant();
    stopped.profile.withdrew = Some(left);
    stopped.profile.withdrawal_reason = WithdrawalReason::StoppedProgram;
    // What the loader keeps: logs up to the day; the weigh-ins after it as follow-up.
    stopped.intake.retain(|x| x.date <= left);
    stopped.activity.retain(|x| x.date <= left);
    stopped.sessions.retain(|x| x.date <= left);
    stopped.labs.retain(|x| x.date <= left);
    for w in stopped.weights.iter_mut().filter(|w| w.date > left) {
        w.weight = Mass::from_kg(w.weight.kg() - 2.0);
    }
    let mut consent = stopped.clone();
    consent.profile.withdrawal_reason = WithdrawalReason::Consent;
    consent.weights.retain(|w| w.date <= left);
    let spec = registry::builtin_modules()[0].spec();
    let fx = fixture::context(&spec, &[]);
    let (prog_info, period, as_of) = (fx.program, fx.period, fx.as_of);
    let run = |p: &ParticipantData| set.run(&prog_info, period, as_of, p);
    let (s, c) = (run(&stopped), run(&consent));
    assert!(
        s.failures.is_empty() && c.failures.is_empty(),
        "{:?}",
        s.failures
    );
    assert_eq!(s.output("energy"), c.output("energy"));
    let e: EnergyView = s.view().unwrap();
    assert_eq!(
        e.weekly_energy
            .last()
            .map(|w| w.implied_intake_kcal_per_day),
        c.view::<EnergyView>()
            .unwrap()
            .weekly_energy
            .last()
            .map(|w| w.implied_intake_kcal_per_day)
    );
    // The weekly table ends with the withdrawal week; the run on every weigh-in (what the
    // module was given before) differs.
    let whole = without_follow_up(&stopped, period.to).expect("follow-up weigh-ins");
    assert_eq!(whole.weights.last().map(|w| w.date), Some(left));
    let before: ModuleResults = {
        let mut r = ModuleResults::default();
        let trend = s.output("trend").unwrap().clone();
        r.outputs.push(("trend".into(), trend));
        r
    };
    let energy_entry = set.entries.iter().find(|x| x.spec.id == "energy").unwrap();
    let naive = set
        .run_one(energy_entry, &prog_info, period, as_of, &stopped, &before)
        .expect("energy runs");
    assert_ne!(Some(&naive), s.output("energy"));
    // The trend and the outcomes read the follow-up weigh-ins: the latest trend level is about
    // 2 kg below the consent run's.
    let (ts, tc): (TrendView, TrendView) = (s.view().unwrap(), c.view().unwrap());
    let (ws, wc) = (
        ts.current_weight_kg.value.unwrap(),
        tc.current_weight_kg.value.unwrap(),
    );
    assert!(wc - ws > 1.0, "trend {ws} kg vs {wc} kg");
    let (os, oc): (OutcomesView, OutcomesView) = (s.view().unwrap(), c.view().unwrap());
    assert_ne!(os.change_kg, oc.change_kg);
    // Without follow-up weigh-ins (consent, or none after the day) nothing is run twice.
    assert!(without_follow_up(&consent, period.to).is_none());
    // Nor with follow-up weigh-ins after the period's end only.
    assert!(without_follow_up(&stopped, left).is_none());
}

/// A flag that only the follow-up weigh-ins of someone who stopped the program raise is kept
/// and named as seen at follow-up, and the energy module's note on the window its cut records
/// do not cover says the logs ended on the day they left. Before, a low BMI seen only at
/// follow-up was listed like any finding of the program, and the note read "The weight trend
/// does not cover enough of the last 28 days" beside a chart whose follow-up weigh-ins covered
/// them (sample program, SG-001 and SG-002 as stopped_program).
#[test]
fn flags_raised_by_follow_up_weigh_ins_alone_are_seen_at_follow_up() {
    use cohortpress_metric_api::{WithdrawalReason, fixture};
    let prog = program("  - id: trend\n  - id: energy\n  - id: adherence\n  - id: outcomes\n");
    let (set, diags) = build_with(&prog, registry::builtin_modules()).expect("builds");
    assert!(errors(&diags).is_empty(), "{diags:?}");
    // Left on the period's first day (day 56), after losing 0.6 kg a week; losing 0.25 kg a
    // day (1.75 kg a week) at follow-up, to about 6.8 kg less on day 83.
    let left = fixture::period().from;
    let mut stopped = fixture::participant();
    for w in &mut stopped.weights {
        let after = (w.date - left).num_days().max(0) as f64;
        w.weight = Mass::from_kg(w.weight.kg() - 0.25 * after);
    }
    stopped.profile.withdrew = Some(left);
    stopped.profile.withdrawal_reason = WithdrawalReason::StoppedProgram;
    stopped.intake.retain(|x| x.date <= left);
    stopped.activity.retain(|x| x.date <= left);
    stopped.sessions.retain(|x| x.date <= left);
    stopped.labs.retain(|x| x.date <= left);
    let mut consent = stopped.clone();
    consent.profile.withdrawal_reason = WithdrawalReason::Consent;
    consent.weights.retain(|w| w.date <= left);
    let spec = registry::builtin_modules()[0].spec();
    let fx = fixture::context(&spec, &[]);
    let (prog_info, period, as_of) = (fx.program, fx.period, fx.as_of);
    let run = |p: &ParticipantData| set.run(&prog_info, period, as_of, p);
    let (s, c) = (run(&stopped), run(&consent));
    let codes = |r: &ModuleResults, m: &str| -> Vec<String> {
        r.output(m)
            .unwrap()
            .flags
            .iter()
            .map(|f| f.code.clone())
            .collect()
    };
    // The fast loss is kept, and is the only flag seen at follow-up only.
    assert!(codes(&s, "outcomes").contains(&"fast_loss".to_string()));
    assert!(!codes(&c, "outcomes").contains(&"fast_loss".to_string()));
    assert_eq!(
        s.follow_up_flags,
        vec![("outcomes".to_string(), "fast_loss".to_string())]
    );
    assert!(s.at_follow_up("outcomes", "fast_loss"));
    assert!(!s.at_follow_up("energy", "fast_loss"));
    assert!(c.follow_up_flags.is_empty());
    // The energy note names the day the logs ended; with withdrawn consent (no follow-up
    // weigh-ins) the module's own words stay.
    let note = |r: &ModuleResults| {
        r.output("energy")
            .unwrap()
            .flags
            .iter()
            .find(|f| f.code == "insufficient_data")
            .map(|f| f.message.clone())
    };
    assert_eq!(
        note(&s).as_deref(),
        Some(
            "Food and activity logs end on 2026-03-02, the day of leaving the program, and the \
             weight after that day is from follow-up weigh-ins, which are not set against logs \
             that had ended; so the intake implied by the weight trend, the forecast and the \
             options are not computed for the end of this period."
        )
    );
    assert!(
        note(&c).is_some_and(|n| n.starts_with("The weight trend does not cover enough")),
        "{:?}",
        note(&c)
    );
}

/// The module registry's errors are at the line and column of what is wrong, as the other
/// program.yaml errors are: an unknown module at its id's value, an unknown setting at its
/// key, a setting's bad value at the value, in block and flow style, and on a flow list on one
/// line at its own entry. They were at the entry's line alone ("program.yaml:27: unknown
/// setting `bogus` for module `trend`" for a `with:` on line 28).
#[test]
fn registry_errors_name_the_line_and_column_of_the_id_or_setting() {
    let positions = |modules: &str| -> Vec<(String, Option<u64>, Option<u64>)> {
        let text = format!(
            "format_version: 1\nprogram: {{id: p, title: T, start: 2027-01-01, end: 2027-12-31}}\n\
             {modules}"
        );
        let prog = crate::program::load::parse_program(std::path::Path::new("."), &text)
            .expect("the program parses");
        let diags = match build_with(&prog, registry::builtin_modules()) {
            Ok((_, d)) | Err(d) => d,
        };
        diags
            .into_iter()
            .map(|d| {
                let field = d.field.clone().unwrap_or_default();
                (field, d.line, d.column)
            })
            .collect()
    };
    let s = |f: &str, l: u64, c: u64| (f.to_string(), Some(l), Some(c));
    assert_eq!(
        positions(
            "modules:\n  - id: trend\n    with: { plateau_window_days: 5, bogus: 1 }   # a comment: x\n  - id: energy\n  - id: adherance\n"
        ),
        [
            s("modules[0].with.bogus", 5, 37),
            s("modules[0].with.plateau_window_days", 5, 34),
            s("modules[2].id", 7, 9),
        ]
    );
    assert_eq!(
        positions("modules:\n  - id: trend\n    with:\n      min_weigh_ins: 1\n      bogus: 2\n"),
        [
            s("modules[0].with.bogus", 7, 7),
            s("modules[0].with.min_weigh_ins", 6, 22),
        ]
    );
    // A flow list on one line: the second entry's id, not the first's.
    assert_eq!(
        positions("modules: [ {id: trend}, {id: trnd} ]\n"),
        [s("modules[1].id", 3, 30)]
    );
}

/// A module that counts its calls and raises an info flag when told to.
struct CallCounter {
    id: &'static str,
    calls: std::sync::Arc<std::sync::atomic::AtomicUsize>,
    flag: bool,
}

impl MetricModule for CallCounter {
    fn spec(&self) -> ModuleSpec {
        ModuleSpec {
            id: self.id.into(),
            version: "1.0.0".into(),
            description: format!("counting module {}", self.id),
            settings: vec![],
            outputs: vec![],
            requires: vec![],
        }
    }

    fn compute(
        &self,
        _ctx: &ModuleContext,
        _data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError> {
        self.calls.fetch_add(1, std::sync::atomic::Ordering::SeqCst);
        let mut out = ModuleOutput::default();
        if self.flag {
            out.push_flag("noted", cohortpress_metric_api::FlagSeverity::Info, "noted");
        }
        Ok(out)
    }
}

/// For someone who stopped the program and weighed in after, every module ran twice, external
/// ones included, though after `energy` the second run only tells which flags were seen at
/// follow-up only. A module after it that raises no flag, with none after it that does, now
/// runs once; one that raises a flag, or that comes before a module that does, still runs
/// twice; and the results are those of running everything twice.
#[test]
fn a_module_after_energy_that_raises_no_flag_runs_once_for_someone_who_stopped() {
    use cohortpress_metric_api::{WithdrawalReason, fixture};
    use std::sync::Arc;
    use std::sync::atomic::{AtomicUsize, Ordering};
    let left = fixture::period().from;
    let mut stopped = fixture::participant();
    for w in &mut stopped.weights {
        let after = (w.date - left).num_days().max(0) as f64;
        w.weight = Mass::from_kg(w.weight.kg() - 0.25 * after);
    }
    stopped.profile.withdrew = Some(left);
    stopped.profile.withdrawal_reason = WithdrawalReason::StoppedProgram;
    let spec = registry::builtin_modules()[0].spec();
    let fx = fixture::context(&spec, &[]);
    // Calls of `quiet` (no flag) and `loud` (a flag), and the results, for a module order.
    let run = |order: &str, p: &ParticipantData| {
        let quiet = Arc::new(AtomicUsize::new(0));
        let loud = Arc::new(AtomicUsize::new(0));
        let mut mods = registry::builtin_modules();
        mods.push(Box::new(CallCounter {
            id: "quiet",
            calls: quiet.clone(),
            flag: false,
        }));
        mods.push(Box::new(CallCounter {
            id: "loud",
            calls: loud.clone(),
            flag: true,
        }));
        let yaml: String = order.split(' ').map(|m| format!("  - id: {m}\n")).collect();
        let (set, diags) = build_with(&program(&yaml), mods).expect("builds");
        assert!(errors(&diags).is_empty(), "{diags:?}");
        let r = set.run(&fx.program, fx.period, fx.as_of, p);
        (quiet.load(Ordering::SeqCst), loud.load(Ordering::SeqCst), r)
    };
    let (q, l, r) = run("trend energy adherence outcomes quiet", &stopped);
    assert_eq!((q, l), (1, 0));
    assert_eq!(
        r.follow_up_flags,
        vec![("outcomes".to_string(), "fast_loss".to_string())]
    );
    // Before energy: on both records, as energy is given its output.
    let (q, ..) = run("trend quiet energy adherence outcomes", &stopped);
    assert_eq!(q, 2);
    // Before a module that raises a flag: twice; the flag is no follow-up flag (raised on both).
    let (q, l, r2) = run("trend energy adherence outcomes quiet loud", &stopped);
    assert_eq!((q, l), (2, 2));
    assert_eq!(r2.follow_up_flags, r.follow_up_flags);
    // A flagged module last, the quiet one after it: once.
    let (q, l, _) = run("trend energy adherence outcomes loud quiet", &stopped);
    assert_eq!((q, l), (1, 2));
    // Nobody else is affected: one run each.
    let mut stayed = stopped.clone();
    stayed.profile.withdrew = None;
    stayed.profile.withdrawal_reason = WithdrawalReason::default();
    let (q, l, r) = run("trend energy adherence outcomes quiet loud", &stayed);
    assert_eq!((q, l), (1, 1));
    assert!(r.follow_up_flags.is_empty());
}

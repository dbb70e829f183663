//! The metric-module API of cohortpress.
//!
//! A *metric module* receives one participant's checked data together with the program's
//! settings and returns named, typed values with units: scalars, dated series, tables and flags.
//! Built-in modules (the `cohortpress-metric-*` crates beside this one) implement
//! [`MetricModule`] directly; external modules are separate programs that speak the JSON protocol
//! in [`protocol`] over standard input and output. The runner knows modules only through this
//! crate, so built-in and external modules look the same to it.
//!
//! Everything here is also the wire format of the external protocol: the types are serialised
//! with serde exactly as they are declared. Within a protocol major version, fields may be
//! added (always optional) but never removed or renamed.
//!
//! Units: inside cohortpress every quantity is held in one system — kilograms, centimetres,
//! kcal, days, mmol/L for glucose, % (NGSP) for HbA1c. Conversions from what people write happen
//! once, at load time, through the constructors in [`units`].

#![warn(missing_docs)]

pub mod data;
pub mod fixture;
pub mod output;
pub mod protocol;
pub mod units;
pub mod view;

pub use data::*;
pub use output::*;

use chrono::NaiveDate;
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Version of this API and of the external JSON protocol (`major.minor`).
///
/// A different major version is refused by the runner; a different minor version only warns.
pub const PROTOCOL_VERSION: &str = "1.0";

/// Display unit system of a program (reports only; computation is always metric).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum UnitSystem {
    /// kg, cm.
    #[default]
    Metric,
    /// lb, ft/in.
    UsCustomary,
}

/// Program-wide targets; a participant's profile may override any of them.
///
/// On the wire, targets this version does not know are ignored and targets a sender leaves out
/// take their defaults, so a target added in a later minor version breaks no module. (Users'
/// typos are caught earlier: `program.yaml` and `profile.yaml` refuse unknown keys.)
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(default)]
pub struct Targets {
    /// Target weight change over the program, % of baseline weight (negative = loss).
    pub weight_change_percent: f64,
    /// Moderate-equivalent activity minutes per week.
    pub activity_minutes_per_week: f64,
    /// Weigh-ins per week.
    pub weigh_ins_per_week: f64,
    /// Days with a food log per week.
    pub food_log_days_per_week: f64,
    /// Group sessions offered over the whole program (for attendance rates).
    pub sessions_offered: u32,
}

impl Default for Targets {
    fn default() -> Self {
        Targets {
            weight_change_percent: -5.0,
            activity_minutes_per_week: 150.0,
            weigh_ins_per_week: 3.0,
            food_log_days_per_week: 5.0,
            sessions_offered: 16,
        }
    }
}

/// What every module knows about the program it runs in.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ProgramInfo {
    /// Program id (letters, digits, `-`, `_`).
    pub id: String,
    /// Human title.
    pub title: String,
    /// First day of the program.
    pub start: NaiveDate,
    /// Last day of the program.
    pub end: NaiveDate,
    /// Display unit system.
    pub units: UnitSystem,
    /// Program-wide targets (before per-participant overrides).
    pub targets: Targets,
}

/// A closed range of days.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct Period {
    /// First day, inclusive.
    pub from: NaiveDate,
    /// Last day, inclusive.
    pub to: NaiveDate,
}

impl Period {
    /// Whether `d` lies in the period.
    pub fn contains(&self, d: NaiveDate) -> bool {
        d >= self.from && d <= self.to
    }
}

/// Everything a module gets besides the participant's data.
#[derive(Debug, Clone, Serialize, Deserialize)]
pub struct ModuleContext {
    /// The program.
    pub program: ProgramInfo,
    /// The reporting period. Modules use data up to `period.to` (never after it).
    pub period: Period,
    /// The day the run treats as "today" (data after it are future data and were dropped).
    pub as_of: NaiveDate,
    /// This module's settings from `program.yaml`, with defaults filled in by the runner.
    pub settings: serde_json::Value,
    /// Outputs of the modules that ran before this one for the same participant, by module id.
    pub earlier: BTreeMap<String, ModuleOutput>,
}

impl ModuleContext {
    /// A scalar computed by an earlier module, if present and not missing.
    pub fn earlier_scalar(&self, module: &str, name: &str) -> Option<f64> {
        self.earlier.get(module)?.scalar(name)
    }

    /// A numeric setting, or `default` when absent.
    pub fn setting_f64(&self, name: &str, default: f64) -> f64 {
        self.settings
            .get(name)
            .and_then(|v| v.as_f64())
            .unwrap_or(default)
    }

    /// A string setting, or `default` when absent.
    pub fn setting_str<'a>(&'a self, name: &str, default: &'a str) -> &'a str {
        self.settings
            .get(name)
            .and_then(|v| v.as_str())
            .unwrap_or(default)
    }
}

/// Kind of a module setting's value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SettingKind {
    /// A number (see `unit`).
    Number,
    /// A whole number.
    Integer,
    /// A string; `choices` lists the allowed values when not empty.
    Text,
    /// true / false.
    Boolean,
}

/// One setting a module accepts under `with:` in `program.yaml`.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SettingSpec {
    /// Key under `with:`.
    pub name: String,
    /// Value kind.
    pub kind: SettingKind,
    /// Default value.
    pub default: serde_json::Value,
    /// Unit of a number, e.g. `kcal/d`, `%`, `d`; empty when unitless.
    #[serde(default)]
    pub unit: String,
    /// Allowed values of a text setting (empty = free text).
    #[serde(default)]
    pub choices: Vec<String>,
    /// Lower bound of a number, inclusive.
    #[serde(default)]
    pub min: Option<f64>,
    /// Upper bound of a number, inclusive.
    #[serde(default)]
    pub max: Option<f64>,
    /// One-line description.
    pub description: String,
}

impl SettingSpec {
    /// A number setting with its unit and inclusive range.
    pub fn number(
        name: &str,
        default: f64,
        unit: &str,
        min: f64,
        max: f64,
        description: &str,
    ) -> Self {
        SettingSpec {
            name: name.into(),
            kind: SettingKind::Number,
            default: serde_json::json!(default),
            unit: unit.into(),
            choices: vec![],
            min: Some(min),
            max: Some(max),
            description: description.into(),
        }
    }
}

/// One named output a module promises.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct OutputSpec {
    /// Output name (snake_case, unit suffix where there is a unit: `tdee_kcal_per_day`).
    pub name: String,
    /// `scalar`, `series`, `table` or `flag`.
    pub kind: String,
    /// Unit, empty when unitless.
    #[serde(default)]
    pub unit: String,
    /// One-line description.
    pub description: String,
    /// A scalar whose values are whole numbers (a count of days, weigh-ins or sessions): the
    /// tidy metrics type it `integer` and write it without a decimal point, as long as every
    /// value written is whole. Absent (false) for modules that do not say.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub whole: bool,
    /// A text output whose values are codes from a fixed list (a status, a class): the codes.
    /// The tidy metrics' descriptor lists them as the column's allowed values (Table Schema
    /// `enum` constraint) as long as every value written is one of them. Empty for free text
    /// and for modules that do not say.
    #[serde(default, skip_serializing_if = "Vec::is_empty")]
    pub codes: Vec<String>,
}

impl OutputSpec {
    /// An output of `kind` (`scalar`, `series`, `table`, `text` or `flag`) with its unit.
    pub fn new(name: &str, kind: &str, unit: &str, description: &str) -> Self {
        OutputSpec {
            name: name.into(),
            kind: kind.into(),
            unit: unit.into(),
            description: description.into(),
            whole: false,
            codes: Vec::new(),
        }
    }

    /// The same output, declared a count: its values are whole numbers ([`OutputSpec::whole`]).
    pub fn counted(mut self) -> Self {
        self.whole = true;
        self
    }

    /// The same text output, declared to take only the codes of `C` ([`OutputSpec::codes`]).
    pub fn coded<C: view::Code>(mut self) -> Self {
        self.codes = C::all().iter().map(|c| c.code().to_owned()).collect();
        self
    }
}

/// What a module says about itself.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModuleSpec {
    /// Id used in `program.yaml` (`energy`, `trend`, …).
    pub id: String,
    /// Module version (semver).
    pub version: String,
    /// One paragraph on what it computes and from which published methods.
    pub description: String,
    /// Settings with defaults and units.
    pub settings: Vec<SettingSpec>,
    /// Outputs it produces.
    pub outputs: Vec<OutputSpec>,
    /// Ids of modules whose outputs this one reads; they must come earlier in `program.yaml`.
    #[serde(default)]
    pub requires: Vec<String>,
}

impl ModuleSpec {
    /// Checks `settings` against this spec: unknown keys, wrong kinds, out-of-range numbers and
    /// values outside `choices` are reported (one message each). Returns the settings with every
    /// default filled in.
    pub fn resolve_settings(
        &self,
        settings: &serde_json::Value,
    ) -> Result<serde_json::Value, Vec<String>> {
        let mut problems = Vec::new();
        let empty = serde_json::Map::new();
        let given = match settings {
            serde_json::Value::Null => &empty,
            serde_json::Value::Object(m) => m,
            other => {
                return Err(vec![format!(
                    "expected a mapping of settings, found {}",
                    json_kind(other)
                )]);
            }
        };
        for key in given.keys() {
            if !self.settings.iter().any(|s| &s.name == key) {
                let known: Vec<&str> = self.settings.iter().map(|s| s.name.as_str()).collect();
                problems.push(format!(
                    "unknown setting `{key}` for module `{}`; expected one of: {}",
                    self.id,
                    known.join(", ")
                ));
            }
        }
        let mut out = serde_json::Map::new();
        for spec in &self.settings {
            let value = given.get(&spec.name).unwrap_or(&spec.default);
            let ok = match spec.kind {
                SettingKind::Number => value.is_number(),
                SettingKind::Integer => value.is_i64() || value.is_u64(),
                SettingKind::Text => value.is_string(),
                SettingKind::Boolean => value.is_boolean(),
            };
            if !ok {
                problems.push(format!(
                    "setting `{}` of module `{}`: expected {:?}, found {}",
                    spec.name,
                    self.id,
                    spec.kind,
                    json_kind(value)
                ));
                continue;
            }
            if let Some(x) = value.as_f64()
                && (spec.min.is_some_and(|m| x < m) || spec.max.is_some_and(|m| x > m))
            {
                {
                    problems.push(format!(
                        "setting `{}` of module `{}`: {x} is outside {}..={} {}",
                        spec.name,
                        self.id,
                        spec.min.map_or("-inf".into(), |m| m.to_string()),
                        spec.max.map_or("inf".into(), |m| m.to_string()),
                        spec.unit
                    ));
                }
            }
            if let Some(s) = value.as_str()
                && !spec.choices.is_empty()
                && !spec.choices.iter().any(|c| c == s)
            {
                {
                    problems.push(format!(
                        "setting `{}` of module `{}`: `{s}` is not one of: {}",
                        spec.name,
                        self.id,
                        spec.choices.join(", ")
                    ));
                }
            }
            out.insert(spec.name.clone(), value.clone());
        }
        if problems.is_empty() {
            Ok(serde_json::Value::Object(out))
        } else {
            Err(problems)
        }
    }
}

fn json_kind(v: &serde_json::Value) -> &'static str {
    match v {
        serde_json::Value::Null => "nothing",
        serde_json::Value::Bool(_) => "a boolean",
        serde_json::Value::Number(_) => "a number",
        serde_json::Value::String(_) => "text",
        serde_json::Value::Array(_) => "a list",
        serde_json::Value::Object(_) => "a mapping",
    }
}

/// Why a module could not compute for one participant.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ModuleError {
    /// What went wrong, in words a program administrator understands.
    pub message: String,
}

impl std::fmt::Display for ModuleError {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(&self.message)
    }
}

impl std::error::Error for ModuleError {}

impl ModuleError {
    /// A new error with `message`.
    pub fn new(message: impl Into<String>) -> Self {
        ModuleError {
            message: message.into(),
        }
    }
}

/// A metric module. Built-in modules implement this directly; external programs are wrapped by
/// the runner in an implementation that speaks [`protocol`].
pub trait MetricModule: Send + Sync {
    /// The module's id, settings and outputs.
    fn spec(&self) -> ModuleSpec;

    /// Computes this module's outputs for one participant.
    ///
    /// `ctx.settings` has been checked against [`MetricModule::spec`] and has every default filled
    /// in. Too little data is not an error: return the output with missing values (`None`) and a
    /// flag saying what was missing. Return an error only when the module cannot run at all.
    fn compute(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError>;
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn targets_accept_fields_they_do_not_know_and_default_missing_ones() {
        let t: Targets = serde_json::from_str(
            r#"{"weight_change_percent": -7.5, "steps_per_day": 8000, "sessions_offered": 12}"#,
        )
        .unwrap();
        assert_eq!(t.weight_change_percent, -7.5);
        assert_eq!(t.sessions_offered, 12);
        assert_eq!(
            t.activity_minutes_per_week,
            Targets::default().activity_minutes_per_week
        );
    }

    fn spec() -> ModuleSpec {
        ModuleSpec {
            id: "demo".into(),
            version: "1.0.0".into(),
            description: "demo".into(),
            settings: vec![
                SettingSpec {
                    name: "window_days".into(),
                    kind: SettingKind::Integer,
                    default: serde_json::json!(28),
                    unit: "d".into(),
                    choices: vec![],
                    min: Some(7.0),
                    max: Some(365.0),
                    description: "window".into(),
                },
                SettingSpec {
                    name: "equation".into(),
                    kind: SettingKind::Text,
                    default: serde_json::json!("mifflin"),
                    unit: String::new(),
                    choices: vec!["mifflin".into(), "henry".into()],
                    min: None,
                    max: None,
                    description: "eq".into(),
                },
            ],
            outputs: vec![],
            requires: vec![],
        }
    }

    #[test]
    fn settings_defaults_are_filled_in() {
        let r = spec().resolve_settings(&serde_json::Value::Null).unwrap();
        assert_eq!(r["window_days"], 28);
        assert_eq!(r["equation"], "mifflin");
    }

    #[test]
    fn settings_problems_are_all_reported() {
        let bad = serde_json::json!({"window_days": 3, "equation": "guess", "colour": 1});
        let errs = spec().resolve_settings(&bad).unwrap_err();
        assert_eq!(errs.len(), 3, "{errs:?}");
        assert!(errs.iter().any(|e| e.contains("unknown setting `colour`")));
        assert!(errs.iter().any(|e| e.contains("outside 7..=365")));
        assert!(errs.iter().any(|e| e.contains("`guess` is not one of")));
    }
}

//! The built-in modules, and checking a program's `modules:` list into a [`ModuleSet`].
//!
//! The host is strict about the keys it owns (`id`, `command`, `timeout_seconds`, `optional`)
//! and leaves the meaning of `with:` to each module's spec: settings are checked by
//! [`ModuleSpec::resolve_settings`], so a module declares its settings once and every problem is
//! reported with the entry's line in `program.yaml`.

use super::external::{CallError, DEFAULT_TIMEOUT_SECONDS, ExternalModule, Launch, VersionCheck};
use crate::diag::Diagnostic;
use crate::program::{ModuleDef, Program};
use cohortpress_metric_api::{MetricModule, ModuleSpec};
use std::collections::BTreeSet;
use std::fmt;
use std::time::Duration;

/// Every built-in module, in a fixed order (the order `cohortpress modules` lists them, and one
/// in which every module's `requires` come before it).
pub fn builtin_modules() -> Vec<Box<dyn MetricModule>> {
    vec![
        Box::new(cohortpress_metric_trend::TrendModule),
        Box::new(cohortpress_metric_energy::EnergyModule),
        Box::new(cohortpress_metric_adherence::AdherenceModule),
        Box::new(cohortpress_metric_outcomes::OutcomesModule),
    ]
}

/// One checked module of a program.
pub(super) struct Entry {
    /// The module's spec (for an external module, as announced in its handshake).
    pub(super) spec: ModuleSpec,
    /// Settings with every default filled in.
    pub(super) settings: serde_json::Value,
    /// The module itself.
    pub(super) module: Box<dyn MetricModule>,
    /// For an external module, its `command:` (part of the fingerprint).
    pub(super) command: Option<Vec<String>>,
}

/// The modules of one program, in `program.yaml` order, with settings resolved. Built once per
/// run by [`build_module_set`]; shared read-only by every participant's computation.
pub struct ModuleSet {
    pub(super) entries: Vec<Entry>,
}

impl fmt::Debug for ModuleSet {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.debug_struct("ModuleSet")
            .field("ids", &self.ids())
            .finish()
    }
}

impl ModuleSet {
    /// Module ids in run order.
    pub fn ids(&self) -> Vec<String> {
        self.entries.iter().map(|e| e.spec.id.clone()).collect()
    }

    /// Module specs in run order.
    pub fn specs(&self) -> Vec<ModuleSpec> {
        self.entries.iter().map(|e| e.spec.clone()).collect()
    }

    /// Resolved settings of module `id`.
    pub fn settings(&self, id: &str) -> Option<&serde_json::Value> {
        self.entries
            .iter()
            .find(|e| e.spec.id == id)
            .map(|e| &e.settings)
    }

    /// Number of modules.
    pub fn len(&self) -> usize {
        self.entries.len()
    }

    /// Whether the set has no modules.
    pub fn is_empty(&self) -> bool {
        self.entries.is_empty()
    }

    /// Stable text naming every module, its version, how it is started and its resolved
    /// settings, one line per module in run order. Two runs whose fingerprints are equal ran the
    /// same modules with the same settings. Keys are sorted here rather than trusting the JSON
    /// map's order, which a dependency's feature flags could change.
    pub fn settings_fingerprint(&self) -> String {
        let mut s = String::new();
        for e in &self.entries {
            s.push_str(&e.spec.id);
            s.push(' ');
            s.push_str(&e.spec.version);
            s.push(' ');
            match &e.command {
                None => s.push_str("builtin"),
                Some(c) => {
                    let shown: Vec<String> = c.iter().map(|w| shown_command_word(w)).collect();
                    canonical_json(&serde_json::json!(shown), &mut s)
                }
            }
            s.push(' ');
            canonical_json(&e.settings, &mut s);
            s.push('\n');
        }
        s
    }
}

/// A word of an external module's `command:` as the fingerprint shows it. The fingerprint is
/// written into `manifest.json` and `shard.json`, which travel with the reports, so an absolute
/// path (`/home/ana/modules/steps.py`, also after `=` in `--config=/…`) or one from the home
/// folder (`~/…`) is shown by its file name alone (`…/steps.py`): no output names the machine's
/// folders, its user or their home. Bare names and paths relative to the program folder are
/// shown as written. (The module is still known by its name, version and settings.)
pub fn shown_command_word(word: &str) -> String {
    let (prefix, path) = match word.find('=') {
        Some(i) if !word.starts_with('/') && !word.starts_with('~') => word.split_at(i + 1),
        _ => ("", word),
    };
    let outside = path.starts_with('/')
        || path.starts_with('~')
        || path.starts_with('\\')
        || path.get(1..3).is_some_and(|s| s == ":\\" || s == ":/");
    if !outside {
        return word.to_string();
    }
    let name = path
        .trim_end_matches(['/', '\\'])
        .rsplit(['/', '\\'])
        .next()
        .unwrap_or_default();
    format!("{prefix}…/{name}")
}

/// JSON with object keys sorted, no spaces.
fn canonical_json(v: &serde_json::Value, out: &mut String) {
    match v {
        serde_json::Value::Object(m) => {
            let mut keys: Vec<&String> = m.keys().collect();
            keys.sort();
            out.push('{');
            for (i, k) in keys.into_iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                out.push_str(&serde_json::Value::String(k.clone()).to_string());
                out.push(':');
                canonical_json(&m[k], out);
            }
            out.push('}');
        }
        serde_json::Value::Array(a) => {
            out.push('[');
            for (i, x) in a.iter().enumerate() {
                if i > 0 {
                    out.push(',');
                }
                canonical_json(x, out);
            }
            out.push(']');
        }
        other => out.push_str(&other.to_string()),
    }
}

/// Checks the program's `modules:` list and builds its [`ModuleSet`].
///
/// Each entry must be a built-in id or have a `command`; its `with:` settings must fit the
/// module's spec; every module it `requires` must come earlier; an external module must answer
/// the handshake with our protocol major version and its listed id. A missing external program
/// marked `optional: true` is skipped with a warning (and so is anything that requires it).
/// Returns the set and its warnings, or every problem found.
pub fn build_module_set(
    program: &Program,
) -> Result<(ModuleSet, Vec<Diagnostic>), Vec<Diagnostic>> {
    build_with(program, builtin_modules())
}

/// [`build_module_set`] against a given list of built-ins (tests use their own).
pub(crate) fn build_with(
    program: &Program,
    builtins: Vec<Box<dyn MetricModule>>,
) -> Result<(ModuleSet, Vec<Diagnostic>), Vec<Diagnostic>> {
    let builtin_ids: Vec<String> = builtins.iter().map(|m| m.spec().id).collect();
    let mut builtins: Vec<Option<Box<dyn MetricModule>>> = builtins.into_iter().map(Some).collect();
    let defs = &program.def.modules;
    let mut diags = Vec::new();
    let mut entries: Vec<Entry> = Vec::new();
    // Ids that are not in the set although listed: skipped optional modules, and modules that
    // had errors (so their dependants are not reported a second time).
    let mut skipped: BTreeSet<String> = BTreeSet::new();
    let mut broken: BTreeSet<String> = BTreeSet::new();

    for (i, def) in defs.iter().enumerate() {
        // At the line and column of the key `field` names in this entry (`.id`, `.with`, a
        // setting's `.with.NAME`): its value for an id or a command, a setting's value when it
        // is the value that is wrong; else at the entry.
        let at = |d: Diagnostic, field: &str| -> Diagnostic {
            let key = field.rsplit('.').next().filter(|k| !k.is_empty());
            let unknown_setting = d.message.starts_with("unknown setting");
            let d = d.field(format!("modules[{i}]{field}"));
            match crate::program::load::module_key_position(
                &program.source,
                &program.module_lines,
                i,
                key,
                !unknown_setting,
            ) {
                Some((line, column)) => d.at(line, column),
                None => d,
            }
        };
        let id = def.id.as_str();
        if let Some(j) = defs[..i].iter().position(|d| d.id == def.id) {
            diags.push(
                at(
                    Diagnostic::error("program.yaml", format!("module `{id}` is listed twice")),
                    ".id",
                )
                .found(format!("entries {} and {}", j + 1, i + 1))
                .hint("list each module once; its outputs are known by its id"),
            );
            continue;
        }

        let (module, spec): (Box<dyn MetricModule>, ModuleSpec) = match &def.command {
            None => {
                let Some(k) = builtin_ids.iter().position(|b| b == id) else {
                    diags.push(
                        at(
                            Diagnostic::error("program.yaml", format!("unknown module `{id}`")),
                            ".id",
                        )
                        .expected(format!("a built-in module: {}", builtin_ids.join(", ")))
                        .found(format!("`{id}`"))
                        .hint(
                            "an external module needs `command:` with its program and \
                             arguments; `cohortpress modules` lists the built-in modules",
                        ),
                    );
                    broken.insert(def.id.clone());
                    continue;
                };
                if def.timeout_seconds.is_some() || def.optional {
                    diags.push(at(
                        Diagnostic::warning(
                            "program.yaml",
                            format!(
                                "`timeout_seconds` and `optional` apply to external modules \
                                 only; they are ignored for the built-in module `{id}`"
                            ),
                        ),
                        "",
                    ));
                }
                let module = builtins[k].take().expect("each built-in is taken once");
                let spec = module.spec();
                (module, spec)
            }
            Some(command) => match external(program, def, command, &builtin_ids, &at, &mut diags) {
                External::Ready(m) => {
                    let spec = m.spec();
                    (m as Box<dyn MetricModule>, spec)
                }
                External::Skipped => {
                    skipped.insert(def.id.clone());
                    continue;
                }
                External::Broken => {
                    broken.insert(def.id.clone());
                    continue;
                }
            },
        };

        let given = match &def.with {
            None => serde_json::Value::Null,
            Some(y) => match serde_json::to_value(y) {
                Ok(v) => v,
                Err(e) => {
                    diags.push(
                        at(
                            Diagnostic::error(
                                "program.yaml",
                                format!("the settings of module `{id}` cannot be read"),
                            ),
                            ".with",
                        )
                        .expected("a mapping of setting names to values")
                        .found(e.to_string()),
                    );
                    broken.insert(def.id.clone());
                    continue;
                }
            },
        };
        let given = if def.command.is_none() && id == "energy" {
            walk_cap_passed(program, given, &mut diags)
        } else {
            given
        };
        let settings = match spec.resolve_settings(&given) {
            Ok(s) => Some(s),
            Err(problems) => {
                for p in problems {
                    // Each problem names its setting first (`unknown setting `x``,
                    // `setting `x` of module …`): at that setting when it is written.
                    let name = p
                        .split('`')
                        .nth(1)
                        .filter(|n| given.get(n).is_some())
                        .map(|n| format!(".with.{n}"))
                        .unwrap_or_else(|| ".with".into());
                    diags.push(
                        at(Diagnostic::error("program.yaml", p), &name).hint(format!(
                            "`cohortpress modules` lists the settings of `{id}`"
                        )),
                    );
                }
                None
            }
        };

        let mut usable = settings.is_some();
        for need in &spec.requires {
            if entries.iter().any(|e| &e.spec.id == need) || broken.contains(need) {
                // Satisfied, or already reported as broken (one message is enough).
                usable &= !broken.contains(need);
                continue;
            }
            if skipped.contains(need) {
                diags.push(at(
                    Diagnostic::warning(
                        "program.yaml",
                        format!(
                            "module `{id}` is skipped because it requires `{need}`, which was \
                             skipped"
                        ),
                    ),
                    ".id",
                ));
                skipped.insert(def.id.clone());
                usable = false;
                continue;
            }
            let later = defs[i + 1..].iter().any(|d| &d.id == need);
            let message = if later {
                format!("module `{id}` requires `{need}`, which comes after it in `modules:`")
            } else {
                format!("module `{id}` requires `{need}`, which is not in `modules:`")
            };
            let hint = if later {
                format!("move `{need}` above `{id}`: modules run in the order they are listed")
            } else {
                format!("add `- id: {need}` to `modules:` before `{id}`")
            };
            diags.push(at(Diagnostic::error("program.yaml", message), ".id").hint(hint));
            usable = false;
        }

        match settings {
            Some(settings) if usable => entries.push(Entry {
                spec,
                settings,
                module,
                command: def.command.clone(),
            }),
            _ => {
                if !skipped.contains(&def.id) {
                    broken.insert(def.id.clone());
                }
            }
        }
    }

    floors_agree(program, &entries, &mut diags);
    underweight_agrees(program, &entries, &mut diags);
    energy_before_outcomes(program, &entries, &mut diags);
    if diags
        .iter()
        .any(|d| d.severity == crate::diag::Severity::Error)
    {
        Err(diags)
    } else {
        Ok((ModuleSet { entries }, diags))
    }
}

/// The intake floors are settings of two modules: `energy` refuses options below them and the
/// report's guidance and cautions print them; `outcomes` raises the clinician's `low_intake`
/// flag below its own. Set apart (`energy`'s floor raised to 1,400 alone), the report would tell a
/// woman logging 1,300 kcal that intakes under 1,400 should be reviewed by a clinician while no
/// flag reached the clinician. Two different values are an error at the `outcomes` entry.
fn floors_agree(program: &Program, entries: &[Entry], diags: &mut Vec<Diagnostic>) {
    let get = |id: &str| entries.iter().find(|e| e.spec.id == id);
    let (Some(energy), Some(outcomes)) = (get("energy"), get("outcomes")) else {
        return;
    };
    let index = program.def.modules.iter().position(|d| d.id == "outcomes");
    for key in ["intake_floor_female", "intake_floor_male"] {
        let at = index.and_then(|i| {
            crate::program::load::module_key_position(
                &program.source,
                &program.module_lines,
                i,
                Some(key),
                true,
            )
        });
        let e = energy.settings.get(key).and_then(|v| v.as_f64());
        let o = outcomes.settings.get(key).and_then(|v| v.as_f64());
        if let (Some(e), Some(o)) = (e, o)
            && e != o
        {
            let d = Diagnostic::error(
                "program.yaml",
                format!(
                    "`{key}` differs between the `energy` module ({e}) and the `outcomes` \
                     module ({o})"
                ),
            )
            .field(format!("modules.outcomes.with.{key}"))
            .expected(format!("the same {key} in both modules ({e})"))
            .found(o.to_string())
            .hint(
                "the report's suggestions and cautions use the energy module's floor and the \
                 clinician's low-intake flag uses the outcomes module's: set both to one value",
            );
            diags.push(match at {
                Some((line, column)) => d.at(line, column),
                None => d,
            });
        }
    }
}

/// `outcomes` reads the `energy` module's results when both run (the implied intake for its
/// `below_resting_intake` and `medication_review` flags, energy's very-low-intake flag), but
/// does not require `energy`, which a program may leave out. Listed after it, `outcomes` saw no
/// energy results: those clinical flags were silently never raised while the report's cautions
/// still named them. It is an error at the `outcomes` entry.
fn energy_before_outcomes(program: &Program, entries: &[Entry], diags: &mut Vec<Diagnostic>) {
    let at = |id: &str| entries.iter().position(|e| e.spec.id == id);
    let (Some(energy), Some(outcomes)) = (at("energy"), at("outcomes")) else {
        return;
    };
    if energy < outcomes {
        return;
    }
    let line = program
        .def
        .modules
        .iter()
        .position(|d| d.id == "outcomes")
        .and_then(|i| {
            crate::program::load::module_key_position(
                &program.source,
                &program.module_lines,
                i,
                None,
                false,
            )
        });
    let d = Diagnostic::error(
        "program.yaml",
        "module `outcomes` comes before `energy` in `modules:`, so its clinical flags that \
         rest on the energy model (intake below resting energy, medication review) could never \
         be raised",
    )
    .field("modules")
    .expected("`energy` listed before `outcomes`")
    .found("`outcomes` first")
    .hint("move the `energy` entry above the `outcomes` entry");
    diags.push(match line {
        Some((l, c)) => d.at(l, c),
        None => d,
    });
}

/// The underweight cut-off is one setting: the `outcomes` module's `underweight_bmi_below` raises
/// the clinician's `low_bmi` flag below it, and the report's guidance sends anyone below it to a
/// clinician with no advice. `guidance.underweight_bmi_below` (the cut-off of programs without
/// `outcomes`) may repeat it; a different value would tell someone at BMI 18.8 to see a
/// clinician while no flag reached the clinician (19 in `guidance:` alone), or flag someone the
/// guidance still advises. It is an error at the `guidance:` key.
fn underweight_agrees(program: &Program, entries: &[Entry], diags: &mut Vec<Diagnostic>) {
    let (Some(g), Some(outcomes)) = (
        program.def.guidance.underweight_bmi_below,
        entries.iter().find(|e| e.spec.id == "outcomes"),
    ) else {
        return;
    };
    let Some(o) = outcomes
        .settings
        .get("underweight_bmi_below")
        .and_then(|v| v.as_f64())
    else {
        return;
    };
    if g != o {
        let d = Diagnostic::error(
            "program.yaml",
            format!(
                "`guidance.underweight_bmi_below` ({g}) differs from the `outcomes` module's \
                 `underweight_bmi_below` ({o})"
            ),
        )
        .field("guidance.underweight_bmi_below")
        .expected(format!(
            "the outcomes module's cut-off ({o}), or no guidance setting"
        ))
        .found(g.to_string())
        .hint(format!(
            "the clinician's low-BMI flag uses the outcomes module's cut-off and the report's \
             advice stops below the guidance one: set `underweight_bmi_below: {g}` in the \
             outcomes module's `with:` and remove it from `guidance:`"
        ));
        let column = program.underweight_line.and_then(|_| {
            crate::program::load::key_position(&program.source, "guidance.underweight_bmi_below")
                .and_then(|(_, c)| c)
        });
        diags.push(match program.underweight_line {
            Some(line) => d.at(line, column),
            None => d,
        });
    }
}

/// The most extra walking an option may ask for is one setting: the program's
/// `guidance.max_walk_minutes` is passed to the `energy` module as its `max_walk_minutes`, so
/// the module's options table (`metrics/tables.csv`) and the report's guidance call the same
/// walks feasible. The module's own cap (120 min/d) and the guidance's (60) differed: a walk of
/// 88 minutes a day was `feasible` in the tidy options while the report never offered it
/// (sample program, September 2026, SG-004). Set in both places to different values, it is an
/// error at the `guidance:` key.
fn walk_cap_passed(
    program: &Program,
    mut given: serde_json::Value,
    diags: &mut Vec<Diagnostic>,
) -> serde_json::Value {
    let Some(g) = program.def.guidance.max_walk_minutes else {
        return given;
    };
    if given.is_null() {
        given = serde_json::json!({});
    }
    let Some(map) = given.as_object_mut() else {
        return given;
    };
    match map.get("max_walk_minutes").map(|v| v.as_f64()) {
        None => {
            map.insert("max_walk_minutes".into(), serde_json::json!(g));
        }
        Some(Some(e)) if e != g => {
            let d = Diagnostic::error(
                "program.yaml",
                format!(
                    "`guidance.max_walk_minutes` ({g}) differs from the `energy` module's \
                     `max_walk_minutes` ({e})"
                ),
            )
            .field("guidance.max_walk_minutes")
            .expected(format!(
                "the energy module's cap ({e}), or one of the two only"
            ))
            .found(g.to_string())
            .hint(
                "the report's options and the energy module's options table use one walking \
                 cap: set it in one place",
            );
            diags.push(
                match crate::program::load::key_position(
                    &program.source,
                    "guidance.max_walk_minutes",
                ) {
                    Some((line, column)) => d.at(line, column),
                    None => d,
                },
            );
        }
        // Equal, or not a number (resolve_settings reports that at the module's key).
        Some(_) => {}
    }
    given
}

enum External {
    Ready(Box<ExternalModule>),
    Skipped,
    Broken,
}

/// Finds an external module and runs its handshake.
fn external(
    program: &Program,
    def: &ModuleDef,
    command: &[String],
    builtin_ids: &[String],
    at: &dyn Fn(Diagnostic, &str) -> Diagnostic,
    diags: &mut Vec<Diagnostic>,
) -> External {
    let id = def.id.as_str();
    if builtin_ids.iter().any(|b| b == id) {
        diags.push(
            at(
                Diagnostic::error(
                    "program.yaml",
                    format!(
                        "`{id}` is the id of a built-in module; an external module needs its own id"
                    ),
                ),
                ".id",
            )
            .hint("remove `command:` to use the built-in module, or rename the external one"),
        );
        return External::Broken;
    }
    let seconds = def.timeout_seconds.unwrap_or(DEFAULT_TIMEOUT_SECONDS);
    if !(seconds.is_finite() && seconds > 0.0 && seconds <= 86_400.0) {
        diags.push(
            at(
                Diagnostic::error("program.yaml", format!("bad timeout for module `{id}`")),
                ".timeout_seconds",
            )
            .expected("a number of seconds above 0 and at most 86400")
            .found(seconds.to_string()),
        );
        return External::Broken;
    }
    let launch = match Launch::new(id, command, &program.root, Duration::from_secs_f64(seconds)) {
        Ok(l) => l,
        Err(e) => {
            diags.push(at(Diagnostic::error("program.yaml", e), ".command"));
            return External::Broken;
        }
    };
    match ExternalModule::describe(launch) {
        Err(CallError::NotFound {
            program: looked_for,
        }) => {
            let written = command.first().map(String::as_str).unwrap_or_default();
            let found = if written.contains('/') {
                format!("no file at {looked_for}")
            } else {
                format!("no `{written}` on PATH")
            };
            if def.optional {
                diags.push(
                    at(
                        Diagnostic::warning(
                            "program.yaml",
                            format!(
                                "external module `{id}` is skipped: program `{written}` was not \
                                 found (it is marked optional)"
                            ),
                        ),
                        ".command",
                    )
                    .found(found),
                );
                External::Skipped
            } else {
                diags.push(
                    at(
                        Diagnostic::error(
                            "program.yaml",
                            format!("external module `{id}`: program `{written}` was not found"),
                        ),
                        ".command",
                    )
                    .found(found)
                    .hint(format!(
                        "install it, fix the path in `command` (a path with `/` is relative to \
                         the program folder; a bare name is looked up on PATH), or set \
                         `optional: true` on module `{id}` to run without it"
                    )),
                );
                External::Broken
            }
        }
        Err(CallError::Failed(m)) => {
            diags.push(
                at(
                    Diagnostic::error(
                        "program.yaml",
                        format!("external module `{id}` failed its handshake: {m}"),
                    ),
                    ".command",
                )
                .hint("see plugins/PROTOCOL.md for what a module must answer"),
            );
            External::Broken
        }
        Ok((module, version)) => {
            if let VersionCheck::MinorDiffers(w) = version {
                diags.push(at(
                    Diagnostic::warning("program.yaml", format!("external module `{id}`: {w}")),
                    ".command",
                ));
            }
            let announced = module.spec().id;
            if announced != id {
                diags.push(
                    at(
                        Diagnostic::error(
                            "program.yaml",
                            format!("external module `{id}` answers with the id `{announced}`"),
                        ),
                        ".id",
                    )
                    .expected(format!("`{id}`"))
                    .found(format!("`{announced}`"))
                    .hint(format!(
                        "write `id: {announced}` if this is the module you meant, or fix \
                         `command`"
                    )),
                );
                return External::Broken;
            }
            External::Ready(Box::new(module))
        }
    }
}

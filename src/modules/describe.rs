//! The plain-text module listing printed by `cohortpress modules [PROGRAM]`.

use super::external::{DEFAULT_TIMEOUT_SECONDS, ExternalModule, Launch, VersionCheck};
use super::registry::builtin_modules;
use crate::diag::printable;
use crate::program::Program;
use cohortpress_metric_api::{ModuleSpec, SettingKind, SettingSpec};
use std::fmt::Write as _;
use std::time::Duration;

/// Text width the descriptions are wrapped to.
const WIDTH: usize = 88;

/// Every built-in module, and, when a program is given, the external modules it lists (each
/// asked for its spec through the handshake): id, version, description, settings, outputs and
/// requirements.
pub fn describe_modules(program: Option<&Program>) -> String {
    let mut s = String::new();
    let used: Vec<&str> = program
        .map(|p| p.def.modules.iter().map(|m| m.id.as_str()).collect())
        .unwrap_or_default();
    s.push_str("Built-in modules\n================\n");
    for m in builtin_modules() {
        let spec = m.spec();
        let note = if program.is_some() && used.contains(&spec.id.as_str()) {
            " (used by this program)"
        } else {
            ""
        };
        write_spec(&mut s, &spec, note);
    }
    if let Some(p) = program {
        let externals: Vec<_> = p
            .def
            .modules
            .iter()
            .filter(|m| m.command.is_some())
            .collect();
        let title = format!("External modules of program `{}`", p.info.id);
        let _ = write!(s, "\n{title}\n{}\n", "=".repeat(title.chars().count()));
        if externals.is_empty() {
            s.push_str("\n(none)\n");
        }
        for def in externals {
            let command = def.command.as_deref().unwrap_or_default();
            let seconds = def.timeout_seconds.unwrap_or(DEFAULT_TIMEOUT_SECONDS);
            // The command is shown as program.yaml gives it, and all the rest of an external
            // module's listing is its own text: control characters are shown escaped, as in every
            // message on the terminal (`diag::printable`), so a spec cannot clear the screen or
            // set the window title.
            let shown = printable(&command.join(" ")).into_owned();
            let described = Launch::new(
                &def.id,
                command,
                &p.root,
                Duration::from_secs_f64(seconds.clamp(0.001, 86_400.0)),
            )
            .map_err(|e| e.to_string())
            .and_then(|l| ExternalModule::describe(l).map_err(|e| e.to_string()));
            match described {
                Ok((module, version)) => {
                    let mut note = format!(" (command: {shown})");
                    if let VersionCheck::MinorDiffers(w) = version {
                        note.push_str(&format!("\n  warning: {}", printable(&w)));
                    }
                    write_spec(
                        &mut s,
                        &cohortpress_metric_api::MetricModule::spec(&module),
                        &note,
                    );
                }
                Err(e) => {
                    let _ = write!(
                        s,
                        "\n{} (command: {shown})\n  could not be described: {}\n",
                        def.id,
                        printable(&e)
                    );
                }
            }
        }
    }
    s
}

fn write_spec(s: &mut String, spec: &ModuleSpec, note: &str) {
    let _ = writeln!(
        s,
        "\n{} {}{note}",
        printable(&spec.id),
        printable(&spec.version)
    );
    wrap_into(s, &spec.description, "  ");
    let requires = if spec.requires.is_empty() {
        "nothing".to_string()
    } else {
        printable(&spec.requires.join(", ")).into_owned()
    };
    let _ = writeln!(s, "  requires: {requires}");
    if spec.settings.is_empty() {
        s.push_str("  settings: none\n");
    } else {
        s.push_str("  settings (under `with:`):\n");
        for set in &spec.settings {
            let _ = writeln!(
                s,
                "    {}: {}",
                printable(&set.name),
                printable(&setting_summary(set))
            );
            wrap_into(s, &set.description, "        ");
        }
    }
    if spec.outputs.is_empty() {
        s.push_str("  outputs: none\n");
    } else {
        s.push_str("  outputs:\n");
        for o in &spec.outputs {
            let unit = if o.unit.is_empty() {
                String::new()
            } else {
                format!(", {}", printable(&o.unit))
            };
            let _ = writeln!(s, "    {} ({}{unit})", printable(&o.name), o.kind);
            wrap_into(s, &o.description, "        ");
        }
    }
}

/// `integer, default 28 d, from 7 to 365` and the like.
fn setting_summary(set: &SettingSpec) -> String {
    let kind = match set.kind {
        SettingKind::Number => "number",
        SettingKind::Integer => "integer",
        SettingKind::Text => "text",
        SettingKind::Boolean => "true/false",
    };
    let default = match &set.default {
        serde_json::Value::String(t) => t.clone(),
        other => other.to_string(),
    };
    let unit = if set.unit.is_empty() {
        String::new()
    } else {
        format!(" {}", set.unit)
    };
    let mut out = format!("{kind}, default {default}{unit}");
    match (set.min, set.max) {
        (Some(a), Some(b)) => out.push_str(&format!(", from {a} to {b}")),
        (Some(a), None) => out.push_str(&format!(", at least {a}")),
        (None, Some(b)) => out.push_str(&format!(", at most {b}")),
        (None, None) => {}
    }
    if !set.choices.is_empty() {
        out.push_str(&format!(", one of: {}", set.choices.join(", ")));
    }
    out
}

/// Appends `text` word-wrapped to [`WIDTH`], each line starting with `indent`.
fn wrap_into(s: &mut String, text: &str, indent: &str) {
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && indent.len() + line.len() + 1 + word.len() > WIDTH {
            let _ = writeln!(s, "{indent}{line}");
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(&printable(word));
    }
    if !line.is_empty() {
        let _ = writeln!(s, "{indent}{line}");
    }
}

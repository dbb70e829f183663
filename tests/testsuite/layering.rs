//! The pipeline runs one way: every `crate::X` reference in `src/` (outside test code) is an
//! edge from its top-level module to `X`, and each edge must go down the layers below, or be
//! one of the few same-layer edges listed. The same map is the architecture section of
//! DEVELOPERS.md; change both together.

use std::collections::BTreeMap;
use std::path::Path;

/// Layers, top to bottom. A module may use the modules of any lower layer.
const LAYERS: &[(&str, &[&str])] = &[
    ("commands", &["cmd"]),
    ("run", &["run"]),
    ("products", &["report", "tidy", "check", "import", "demo"]),
    ("computation", &["modules", "group", "render"]),
    ("inputs", &["participant", "program"]),
    ("writing", &["output"]),
    (
        "foundation",
        &[
            "yaml",
            "diag",
            "encoding",
            "limits",
            "activities",
            "csv_out",
            "text",
            "progress",
            "exit_code",
        ],
    ),
];

/// Edges within one layer, each with its reason. Nothing else within a layer is allowed.
const SAME_LAYER: &[(&str, &str, &str)] = &[
    (
        "participant",
        "program",
        "the readers follow the program's input settings and its file specs",
    ),
    ("yaml", "diag", "YAML errors are diagnostics"),
    ("yaml", "limits", "the YAML budget"),
    ("diag", "limits", "a cap on repeated diagnostics"),
    (
        "csv_out",
        "text",
        "CSV cells escape the invisible characters the reports drop",
    ),
];

/// Modules only the commands may use: exit codes are chosen by commands alone.
const COMMANDS_ONLY: &[&str] = &["exit_code"];

fn layer_of(module: &str) -> Option<usize> {
    LAYERS.iter().position(|(_, ms)| ms.contains(&module))
}

/// `crate::X` references per top-level module of `src/` (lib code only: `main.rs`, `src/bin`,
/// comments and test code are skipped). Each edge comes with one place that makes it.
fn edges(src: &Path) -> BTreeMap<(String, String), String> {
    let mut out = BTreeMap::new();
    let mut stack = vec![src.to_path_buf()];
    while let Some(dir) = stack.pop() {
        for entry in std::fs::read_dir(&dir).unwrap() {
            let path = entry.unwrap().path();
            if path.is_dir() {
                stack.push(path);
                continue;
            }
            let rel = path
                .strip_prefix(src)
                .unwrap()
                .to_string_lossy()
                .replace('\\', "/");
            let name = path.file_name().unwrap().to_string_lossy().into_owned();
            if !rel.ends_with(".rs")
                || rel == "main.rs"
                || rel == "lib.rs"
                || rel.starts_with("bin/")
                || name == "tests.rs"
                || name.ends_with("_tests.rs")
            {
                continue;
            }
            let top = rel
                .split('/')
                .next()
                .unwrap()
                .trim_end_matches(".rs")
                .to_string();
            let text = std::fs::read_to_string(&path).unwrap();
            // Unit tests may reach anywhere; only the code before them counts.
            let code = match text.find("#[cfg(test)]\nmod tests") {
                Some(i) => &text[..i],
                None => &text[..],
            };
            for (n, line) in code.lines().enumerate() {
                let line = line.split("//").next().unwrap();
                for piece in line.split("crate::").skip(1) {
                    let target: String = piece
                        .chars()
                        .take_while(|c| c.is_ascii_alphanumeric() || *c == '_')
                        .collect();
                    if !target.is_empty() && target != top {
                        out.entry((top.clone(), target))
                            .or_insert_with(|| format!("src/{rel}:{}", n + 1));
                    }
                }
            }
        }
    }
    out
}

/// What is wrong with a set of edges, one line each.
fn violations(edges: &BTreeMap<(String, String), String>) -> Vec<String> {
    let mut bad = Vec::new();
    for ((from, to), at) in edges {
        let (Some(lf), Some(lt)) = (layer_of(from), layer_of(to)) else {
            bad.push(format!(
                "{at}: `{from}` → `{to}`: a module missing from LAYERS"
            ));
            continue;
        };
        if COMMANDS_ONLY.contains(&to.as_str()) && from != "cmd" {
            bad.push(format!(
                "{at}: `{from}` uses `{to}`, which only the commands may use"
            ));
        } else if lf > lt || (lf == lt && !SAME_LAYER.iter().any(|(a, b, _)| a == from && b == to))
        {
            bad.push(format!(
                "{at}: `{from}` ({}) may not use `{to}` ({})",
                LAYERS[lf].0, LAYERS[lt].0
            ));
        }
    }
    bad
}

#[test]
fn imports_go_down_the_layers() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let edges = edges(&src);
    let bad = violations(&edges);
    assert!(bad.is_empty(), "layering broken:\n{}", bad.join("\n"));
    // Every top-level module of the library is placed in a layer.
    let lib = std::fs::read_to_string(src.join("lib.rs")).unwrap();
    for line in lib.lines() {
        let line = line.trim();
        if let Some(m) = line
            .strip_prefix("pub mod ")
            .or_else(|| line.strip_prefix("pub(crate) mod "))
            .or_else(|| line.strip_prefix("mod "))
        {
            let m = m.trim_end_matches(';');
            assert!(layer_of(m).is_some(), "src/lib.rs: `{m}` is in no layer");
        }
    }
    // The real graph has the edges the map is about (a reader that saw nothing would pass).
    assert!(edges.contains_key(&("run".into(), "report".into())));
    assert!(edges.contains_key(&("cmd".into(), "run".into())));
}

#[test]
fn an_upward_import_is_caught() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut edges = edges(&src);
    edges.insert(
        ("report".into(), "run".into()),
        "src/report/mod.rs:1".into(),
    );
    edges.insert(("tidy".into(), "exit_code".into()), "src/tidy.rs:1".into());
    let bad = violations(&edges);
    assert_eq!(
        bad,
        vec![
            "src/report/mod.rs:1: `report` (products) may not use `run` (run)".to_string(),
            "src/tidy.rs:1: `tidy` uses `exit_code`, which only the commands may use".to_string(),
        ]
    );
}

#[test]
fn same_layer_edges_have_no_cycle() {
    // Layers are ordered, so a cycle could only run through the same-layer edges.
    for (a, b, _) in SAME_LAYER {
        assert!(
            !SAME_LAYER.iter().any(|(c, d, _)| c == b && d == a),
            "`{a}` and `{b}` use each other"
        );
        assert_eq!(
            layer_of(a),
            layer_of(b),
            "`{a}` → `{b}` is not within one layer"
        );
    }
}

/// Every CSV the tool writes goes through `csv_out::Writer`, which quotes text that begins like
/// a spreadsheet formula: the follow-up list's CSV used the `csv` crate's writer directly and
/// wrote a participant's name raw.
#[test]
fn only_csv_out_makes_a_csv_writer() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut found = Vec::new();
    for entry in walkdir::WalkDir::new(&src) {
        let entry = entry.unwrap();
        let p = entry.path();
        if p.extension().is_none_or(|e| e != "rs") || p.ends_with("csv_out.rs") {
            continue;
        }
        let text = std::fs::read_to_string(p).unwrap();
        for (i, line) in text.lines().enumerate() {
            if line.contains("csv::Writer") || line.contains("csv::WriterBuilder") {
                found.push(format!("{}:{}", p.display(), i + 1));
            }
        }
    }
    assert!(found.is_empty(), "{found:?}");
}

//! The user documentation against the binary: every module setting `cohortpress modules` lists
//! is in docs/GUIDE.md's "Module settings" table with its type, default and range, every
//! option of every command's `--help` is named in the guide, and every link between the
//! documents (file and anchor) resolves.

use crate::harness::repo_root;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_cohortpress");

fn stdout(args: &[&str]) -> String {
    let out = Command::new(BIN).args(args).output().unwrap();
    assert!(out.status.success(), "{args:?}: {out:?}");
    String::from_utf8(out.stdout).unwrap()
}

fn read(doc: &str) -> String {
    std::fs::read_to_string(repo_root().join(doc)).unwrap()
}

/// The lines of `doc` from the heading `heading` to the next heading of its level or above.
fn section(doc: &str, heading: &str) -> String {
    let text = read(doc);
    let level = heading.chars().take_while(|c| *c == '#').count();
    let mut lines = text.lines().skip_while(|l| *l != heading);
    assert!(lines.next().is_some(), "{doc} has no heading {heading}");
    lines
        .take_while(|l| {
            let hashes = l.chars().take_while(|c| *c == '#').count();
            !(hashes > 0 && hashes <= level && l[hashes..].starts_with(' '))
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// README.md's "Two commands" build and run through `cargo run`, and every later example calls
/// `cohortpress` as a command, which a first-time user following the README did not have: how
/// to install it was said only in docs/GUIDE.md's section on cron. The README says where the
/// binary is, and how to install it, before its first bare `cohortpress` command.
#[test]
fn the_readme_says_how_to_get_the_cohortpress_command_before_using_it() {
    let readme = read("README.md");
    let install = readme
        .find("cargo install --path . --locked")
        .expect("README.md says how to install the binary");
    let first_use = readme
        .find("`cohortpress ")
        .expect("README.md uses the command");
    assert!(
        install < first_use,
        "README.md uses `cohortpress` (byte {first_use}) before saying how to install it (byte {install})"
    );
    assert!(readme[..first_use].contains("target/release/cohortpress"));
}

/// README.md's first command "writes `sample-program/reports/`", and it also made
/// `sample-program/reports.ledger/`, which the README did not name: a new user who tidies the
/// sample by deleting `reports/` keeps a ledger that audits every later run. Every folder or
/// visible file the README's sample run adds to the program folder is named in "Two commands".
#[test]
fn the_readme_names_what_its_sample_run_adds_to_the_program_folder() {
    let t = crate::harness::ProgramTest::sample();
    let names = |dir: &std::path::Path| -> std::collections::BTreeSet<String> {
        std::fs::read_dir(dir)
            .unwrap()
            .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
            .filter(|n| !n.starts_with('.'))
            .collect()
    };
    let before = names(&t.dir);
    let o = t.run(&["run", "{dir}", "--formats", "html"]);
    assert_eq!(o.code, 4, "{o:?}");
    let two = section("README.md", "## Two commands");
    let added: Vec<String> = names(&t.dir).difference(&before).cloned().collect();
    assert!(added.contains(&"reports".to_string()), "{added:?}");
    for name in &added {
        assert!(
            two.contains(&format!("`sample-program/{name}/`"))
                || two.contains(&format!("`sample-program/{name}`")),
            "the sample run adds {name} to the program folder, and README.md's \"Two commands\" does not name it"
        );
    }
}

/// The guide listed none of the `trend` module's five settings, nor `energy`'s `walking_met`
/// or `outcomes`' `fast_loss_span_days`: a program that wanted a longer plateau window had only
/// `cohortpress modules` to learn the name from. Each setting is now a row of the guide's
/// table, which this test keeps in step with what the modules declare.
#[test]
fn every_module_setting_is_in_the_guides_table_with_its_default_and_range() {
    let listing = stdout(&["modules"]);
    let table = section("docs/GUIDE.md", "## Module settings");
    let mut module = "";
    let mut settings = false;
    let mut seen = 0;
    let mut missing = Vec::new();
    for line in listing.lines() {
        if !line.starts_with(' ') && line.contains(" 0.") {
            module = line.split(' ').next().unwrap();
        } else if line.trim_start().starts_with("settings (under") {
            settings = true;
        } else if line.trim() == "outputs:" {
            settings = false;
        } else if settings && line.starts_with("    ") && !line.starts_with("     ") {
            // `    name: type, default D, from A to B` (or `, one of: …`)
            let (name, rest) = line.trim().split_once(": ").unwrap();
            let (ty, rest) = rest.split_once(", default ").unwrap();
            let (default, allowed) = rest.split_once(", ").unwrap_or((rest, ""));
            let row = format!("| `{module}` | `{name}` | {ty} | {default} | {allowed} |");
            seen += 1;
            if !table.lines().any(|l| l.starts_with(&row)) {
                missing.push(row);
            }
        }
    }
    assert!(seen >= 29, "{seen} settings parsed from:\n{listing}");
    assert!(
        missing.is_empty(),
        "not in the guide's table:\n{}",
        missing.join("\n")
    );
}

/// Every long option each command's `--help` lists is named in the guide beside its command
/// (`run --jobs`, `check --format` …), so no option is known from `--help` alone: `merge
/// --quiet` was in neither of the guide's `merge` synopses.
#[test]
fn every_option_in_help_is_in_the_guide() {
    let guide = read("docs/GUIDE.md");
    let commands: [&[&str]; 6] = [
        &["check"],
        &["run"],
        &["merge"],
        &["demo-program"],
        &["import", "fhir"],
        &["templates", "dump"],
    ];
    let mut missing = Vec::new();
    for command in commands {
        let mut args = command.to_vec();
        args.push("--help");
        let help = stdout(&args);
        let options = help.split_once("Options:").unwrap().1;
        for word in options.split(|c: char| c.is_whitespace() || c == ',') {
            let Some(name) = word.strip_prefix("--") else {
                continue;
            };
            let name: String = name
                .chars()
                .take_while(|c| c.is_ascii_lowercase() || *c == '-')
                .collect();
            if name.is_empty() || name == "help" {
                continue;
            }
            // Named with the command: in a paragraph (or code block) of the guide that gives
            // its synopsis or lists its options.
            let named = guide.split("\n\n").any(|p| {
                p.contains(&format!("--{name}"))
                    && (p.contains(&format!("cohortpress {}", command.join(" ")))
                        || p.contains(&format!("`{}` options", command[0])))
            });
            if !named {
                missing.push(format!("{} --{name}", command.join(" ")));
            }
        }
    }
    missing.sort();
    missing.dedup();
    assert!(missing.is_empty(), "not in docs/GUIDE.md: {missing:?}");
}

/// GitHub's anchor of a heading: lower case, punctuation but `-` and `_` dropped, spaces to `-`.
fn anchor(heading: &str) -> String {
    heading
        .trim()
        .to_lowercase()
        .chars()
        .filter(|c| c.is_alphanumeric() || matches!(c, '-' | '_' | ' '))
        .map(|c| if c == ' ' { '-' } else { c })
        .collect()
}

fn anchors(doc: &str) -> Vec<String> {
    let mut fenced = false;
    read(doc)
        .lines()
        .filter(|l| {
            if l.starts_with("```") {
                fenced = !fenced;
            }
            !fenced && l.starts_with('#')
        })
        .map(|l| anchor(l.trim_start_matches('#')))
        .collect()
}

/// Every `[text](target)` link of the four documents names a file that exists and, after `#`,
/// a heading of it.
#[test]
fn links_between_the_documents_resolve() {
    let mut broken = Vec::new();
    let mut links = 0;
    for doc in [
        "README.md",
        "docs/GUIDE.md",
        "docs/METHODS.md",
        "DEVELOPERS.md",
    ] {
        let text = read(doc);
        for (i, _) in text.match_indices("](") {
            let target: String = text[i + 2..].chars().take_while(|c| *c != ')').collect();
            if target.starts_with("http") || target.contains(' ') {
                continue;
            }
            links += 1;
            let (file, hash) = target.split_once('#').unwrap_or((&target, ""));
            let file = if file.is_empty() {
                doc.to_string()
            } else {
                let base = std::path::Path::new(doc).parent().unwrap().join(file);
                base.to_string_lossy().replace("docs/../", "")
            };
            if !repo_root().join(&file).exists() {
                broken.push(format!("{doc}: {target} (no file {file})"));
            } else if !hash.is_empty()
                && file.ends_with(".md")
                && !anchors(&file).iter().any(|a| a == hash)
            {
                broken.push(format!("{doc}: {target} (no heading)"));
            }
        }
    }
    assert!(links >= 10, "{links} links");
    assert!(broken.is_empty(), "{broken:#?}");
}

/// README.md's "Outputs" tree listed what is inside `reports/` and not the group-report ledger
/// a run makes beside it, which stays when `reports/` is replaced or deleted. The tree names
/// the ledger where a run puts it: without `--state` beside `report.out`'s folder whatever
/// `--out` says, with `--state DIR` there.
#[test]
fn the_readmes_outputs_tree_names_the_ledger_where_a_run_puts_it() {
    let t = crate::harness::ProgramTest::demo(3);
    let elsewhere = tempfile::tempdir_in(env!("CARGO_TARGET_TMPDIR")).unwrap();
    let out = elsewhere.path().join("preview");
    let o = t.run(&[
        "run",
        "{dir}",
        "--formats",
        "html",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert!(o.code <= 1, "{o:?}");
    // Without --state: the program's own, `report.out`'s name plus `.ledger`, beside it.
    assert!(t.dir.join("reports.ledger/ledger.json").is_file(), "{o:?}");
    assert!(t.dir.join("reports.ledger/secret.key").is_file());
    assert!(!elsewhere.path().join("preview.ledger").exists());
    // With --state: there, and none made beside report.out.
    let u = crate::harness::ProgramTest::demo(3);
    let state = elsewhere.path().join("state");
    let o = u.run(&[
        "run",
        "{dir}",
        "--formats",
        "html",
        "--state",
        &state.to_string_lossy(),
    ]);
    assert!(o.code <= 1, "{o:?}");
    assert!(state.join("ledger.json").is_file(), "{o:?}");
    assert!(!u.dir.join("reports.ledger").exists());

    let outputs = section("README.md", "## Outputs");
    let tree = outputs.split("```").nth(1).expect("the Outputs tree");
    let line = tree
        .lines()
        .find(|l| l.starts_with("reports.ledger/"))
        .unwrap_or_else(|| panic!("the Outputs tree does not list reports.ledger/:\n{tree}"));
    for words in ["beside reports/", "whatever --out says", "--state DIR"] {
        assert!(line.contains(words), "`{words}` not in: {line}");
    }
    assert!(
        tree.contains("ledger.json, secret.key"),
        "the ledger's files are not named:\n{tree}"
    );
}

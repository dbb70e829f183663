//! Accessibility of the HTML reports, checked by axe-core (Deque's open-source rule engine,
//! version 4.x from the npm registry) inside a real headless Chromium.
//!
//! Each page is copied into a temporary folder with `axe.min.js` and a small runner script
//! injected before `</body>`; `chromium --headless --dump-dom` loads it, the runner writes the
//! violation list as JSON into `<pre id="axe-result">`, and the test reads it back from the
//! dumped DOM. axe runs its default rule set: WCAG 2.0/2.1 A and AA plus its best practices
//! (which include empty table headers and ARIA roles not allowed on an element).
//!
//! The browser checks need Chromium and axe-core. Without them they skip with a message on
//! stderr, unless `COHORTPRESS_REQUIRE_AXE=1` is set (CI sets it after installing both), in
//! which case a missing tool is a failure. Where to look:
//! - axe-core: `$AXE_CORE_JS`, else `.ci/node_modules/axe-core/axe.min.js`
//!   (`npm install --prefix .ci axe-core@4`);
//! - Chromium: `$CHROMIUM`, else `chromium`, `chromium-browser` or `google-chrome` on `PATH`.

use crate::harness::repo_root;
use crate::reports::sample_run;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Participants checked in the browser: one with every section filled (plateau, labs,
/// maintenance guidance) and the three whose charts had crowded legends.
const PARTICIPANTS: &[&str] = &["SG-007", "SG-002", "SG-024", "SG-035"];

/// Runs axe over the collected results and turns them into the list the test reads. Non-ASCII
/// characters are escaped so the dumped DOM holds only `&lt;`, `&gt;` and `&amp;` entities.
const RUNNER: &str = r#"(function () {
  function done(text) {
    var pre = document.createElement('pre');
    pre.id = 'axe-result';
    pre.textContent = text.replace(/[\u007f-\uffff]/g, function (c) {
      return '\\u' + ('000' + c.charCodeAt(0).toString(16)).slice(-4);
    });
    document.body.appendChild(pre);
  }
  // The page, every figure and every table (and its scroll box) that scrolls sideways at this
  // width, with the heading before it.
  function heading(e) {
    var h = Array.from(document.querySelectorAll('h1, h2, h3'))
      .filter(function (h) { return h.compareDocumentPosition(e) & Node.DOCUMENT_POSITION_FOLLOWING; })
      .pop();
    return h ? ' after "' + h.textContent.slice(0, 60) + '"' : '';
  }
  var overflow = [document.documentElement]
    .concat(Array.from(document.querySelectorAll('figure, .table-wrap, table')))
    .filter(function (e) { return e.scrollWidth > e.clientWidth + 1; })
    .map(function (e) {
      return e.tagName.toLowerCase() + (e.className ? '.' + e.className.replace(/ /g, '.') : '') + ' '
        + e.scrollWidth + ' px in ' + e.clientWidth + ' px' + heading(e);
    });
  axe.run(document, { resultTypes: ['violations'] }).then(function (r) {
    done(JSON.stringify({ overflow: overflow, violations: r.violations.map(function (v) {
      return { id: v.id, impact: v.impact, help: v.help, nodes: v.nodes.map(function (n) {
        return { target: n.target.join(' '), html: n.html.slice(0, 160) };
      }) };
    }) }));
  }).catch(function (e) { done('AXE-ERROR ' + e); });
})();
"#;

/// One element axe found at fault.
#[derive(Debug)]
struct Node {
    target: String,
    html: String,
}

/// One failed axe rule with the elements that fail it.
#[derive(Debug)]
struct Violation {
    id: String,
    help: String,
    nodes: Vec<Node>,
}

/// Chromium and axe-core, when both are present.
struct Tools {
    chromium: PathBuf,
    axe: PathBuf,
}

fn find_on_path(names: &[&str]) -> Option<PathBuf> {
    let path = std::env::var_os("PATH")?;
    std::env::split_paths(&path)
        .flat_map(|dir| names.iter().map(move |n| dir.join(n)))
        .find(|p| p.is_file())
}

/// The tools, or `None` after printing why the browser check is skipped. Panics instead when
/// `COHORTPRESS_REQUIRE_AXE=1`.
fn tools() -> Option<Tools> {
    let chromium = std::env::var_os("CHROMIUM")
        .map(PathBuf::from)
        .filter(|p| p.is_file())
        .or_else(|| find_on_path(&["chromium", "chromium-browser", "google-chrome"]));
    let axe = std::env::var_os("AXE_CORE_JS")
        .map(PathBuf::from)
        .unwrap_or_else(|| repo_root().join(".ci/node_modules/axe-core/axe.min.js"));
    let missing = match (&chromium, axe.is_file()) {
        (Some(_), true) => None,
        (None, _) => Some(
            "Chromium not found (install the `chromium` package or set CHROMIUM=/path/to/chromium)"
                .to_string(),
        ),
        (_, false) => Some(format!(
            "axe-core not found at {} (run `npm install --prefix .ci axe-core@4` or set AXE_CORE_JS)",
            axe.display()
        )),
    };
    match missing {
        None => Some(Tools {
            chromium: chromium.expect("checked above"),
            axe,
        }),
        Some(why) if std::env::var("COHORTPRESS_REQUIRE_AXE").as_deref() == Ok("1") => {
            panic!("COHORTPRESS_REQUIRE_AXE=1 but {why}")
        }
        Some(why) => {
            eprintln!("SKIPPED: axe-core accessibility check in Chromium: {why}");
            None
        }
    }
}

/// What one page load found.
struct Check {
    /// axe's violations.
    violations: Vec<Violation>,
    /// The page, figures, tables or their scroll boxes (`.table-wrap`) that scroll sideways, as
    /// `tag.class N px in M px after "heading"`.
    overflow: Vec<String>,
}

/// Widths the pages are checked at: a desktop, a small tablet (where the wide tables are already
/// stacked) and a phone (390 CSS px). The page is loaded into a frame of that width
/// ([`dump_dom`]); its scroll bar takes 15 px of it, so a phone's 375 px are checked as well.
const WIDTHS: [u32; 3] = [1000, 640, 390];

/// Loads `html` in headless Chromium, `width` CSS px wide, with axe injected.
fn axe_check(tools: &Tools, html: &str, width: u32) -> Check {
    let tmp = tempfile::Builder::new()
        .prefix("cohortpress-axe-")
        .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
        .expect("temp dir");
    let dir = tmp.path();
    std::fs::copy(&tools.axe, dir.join("axe.min.js")).expect("copy axe.min.js");
    std::fs::write(dir.join("run-axe.js"), RUNNER).expect("write runner");
    let inject = "<script src=\"axe.min.js\"></script><script src=\"run-axe.js\"></script>\n";
    let at = html.rfind("</body>").expect("page has </body>");
    let page = format!("{}{inject}{}", &html[..at], &html[at..]);
    std::fs::write(dir.join("page.html"), page).expect("write page");

    let dom = dump_dom(tools, dir, "page.html", width, "axe-result");
    let start = dom
        .find("<pre id=\"axe-result\">")
        .unwrap_or_else(|| panic!("axe wrote no result; the dumped page ends:\n{}", tail(&dom)))
        + "<pre id=\"axe-result\">".len();
    let end = start + dom[start..].find("</pre>").expect("end of axe result");
    let text = dom[start..end]
        .replace("&lt;", "<")
        .replace("&gt;", ">")
        .replace("&amp;", "&");
    assert!(!text.starts_with("AXE-ERROR"), "axe failed: {text}");
    let json: serde_json::Value = serde_json::from_str(&text).expect("axe result is JSON");
    let str_of = |v: &serde_json::Value, k: &str| v[k].as_str().unwrap_or_default().to_string();
    let overflow = json["overflow"]
        .as_array()
        .expect("overflow list")
        .iter()
        .map(|v| v.as_str().unwrap_or_default().to_string())
        .collect();
    let violations = json["violations"]
        .as_array()
        .expect("violation list")
        .iter()
        .map(|v| Violation {
            id: str_of(v, "id"),
            help: str_of(v, "help"),
            nodes: v["nodes"]
                .as_array()
                .expect("nodes")
                .iter()
                .map(|n| Node {
                    target: str_of(n, "target"),
                    html: str_of(n, "html"),
                })
                .collect(),
        })
        .collect();
    Check {
        violations,
        overflow,
    }
}

fn tail(s: &str) -> &str {
    let cut = s.len().saturating_sub(2000);
    let cut = (cut..s.len())
        .find(|&i| s.is_char_boundary(i))
        .unwrap_or(s.len());
    &s[cut..]
}

/// Runs headless Chromium on `page` (a file in `dir`) shown `width` CSS px wide and returns the
/// serialised DOM after scripts ran, with the `<pre id="{result}">` the page's own script wrote.
/// The browser gets a fresh profile in `dir`, no network services, and two minutes at most.
///
/// Headless Chromium's window is never narrower than 500 px (Chromium 148: `--window-size=390,900`
/// gives a page 500 px wide, so a "390 px" check looked at 500 px), so the page is loaded into an
/// `<iframe>` exactly `width` px wide, which is the page's viewport, media queries included. The
/// frame's result is copied into the top page (files share one origin with
/// `--allow-file-access-from-files`), whose DOM Chromium prints.
fn dump_dom(tools: &Tools, dir: &Path, page: &str, width: u32, result: &str) -> String {
    assert!(
        [page, result].iter().all(|s| s
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '-' || c == '.')),
        "plain file name and id"
    );
    let frame = format!(
        r#"<!DOCTYPE html><html lang="en"><head><title>frame</title>
<style>body {{ margin: 0; }} iframe {{ display: block; border: 0; width: {width}px; height: 900px; }}</style>
</head><body><iframe id="page" title="page" src="{page}"></iframe><script>
(function poll() {{
  var doc = null;
  try {{ doc = document.getElementById('page').contentDocument; }} catch (e) {{}}
  var found = doc && doc.getElementById('{result}');
  if (!found) {{ setTimeout(poll, 50); return; }}
  var pre = document.createElement('pre');
  pre.id = '{result}';
  pre.textContent = found.textContent;
  document.body.appendChild(pre);
}})();
</script></body></html>
"#
    );
    std::fs::write(dir.join("frame.html"), frame).expect("write frame");
    let out_path = dir.join("dom.html");
    let err_path = dir.join("chromium.log");
    let mut child = Command::new(&tools.chromium)
        // Tests often run as root in containers, where Chromium's sandbox refuses to start;
        // the page is our own local file.
        .arg("--no-sandbox")
        .args([
            "--headless",
            "--disable-gpu",
            "--disable-background-networking",
            "--disable-component-update",
            "--disable-sync",
            "--no-first-run",
            "--virtual-time-budget=10000",
            "--dump-dom",
            // The frame's document is read from the top page (see above).
            "--allow-file-access-from-files",
        ])
        .arg(format!("--window-size={},900", width.max(500)))
        .arg(format!("--user-data-dir={}", dir.join("profile").display()))
        .arg(format!("file://{}", dir.join("frame.html").display()))
        .stdin(Stdio::null())
        .stdout(std::fs::File::create(&out_path).expect("dom file"))
        .stderr(std::fs::File::create(&err_path).expect("log file"))
        .spawn()
        .unwrap_or_else(|e| panic!("start {}: {e}", tools.chromium.display()));
    let deadline = Instant::now() + Duration::from_secs(120);
    loop {
        match child.try_wait().expect("wait for chromium") {
            Some(_) => break,
            None if Instant::now() > deadline => {
                let _ = child.kill();
                let _ = child.wait();
                panic!("chromium did not finish within 120 s");
            }
            None => std::thread::sleep(Duration::from_millis(100)),
        }
    }
    let dom = std::fs::read_to_string(&out_path).unwrap_or_default();
    if dom.is_empty() {
        let log = std::fs::read_to_string(&err_path).unwrap_or_default();
        panic!("chromium printed no DOM; its log ends:\n{}", tail(&log));
    }
    dom
}

fn describe(violations: &[Violation]) -> String {
    let mut s = String::new();
    for v in violations {
        s.push_str(&format!("{} ({}):\n", v.id, v.help));
        for n in &v.nodes {
            s.push_str(&format!("    {}  {}\n", n.target, n.html));
        }
    }
    s
}

/// The checker itself finds known faults, so an empty list below means something.
#[test]
fn axe_reports_the_faults_of_a_broken_page() {
    let Some(tools) = tools() else { return };
    let page = r#"<!DOCTYPE html><html lang="en"><head><title>Broken</title></head><body><main>
<h1>Broken page</h1>
<img src="missing.png">
<table><thead><tr><th></th><th>Weight</th></tr></thead><tbody><tr><td>Week 1</td><td>80</td></tr></tbody></table>
<figure role="img" aria-label="A chart"><svg width="10" height="10"></svg><figcaption>A chart. More words.</figcaption></figure>
</main></body></html>"#;
    let found = axe_check(&tools, page, 1000).violations;
    let ids: Vec<&str> = found.iter().map(|v| v.id.as_str()).collect();
    for expected in ["image-alt", "empty-table-header", "aria-allowed-role"] {
        assert!(
            ids.contains(&expected),
            "axe should report {expected}; it reported:\n{}",
            describe(&found)
        );
    }
}

#[test]
fn participant_reports_have_no_axe_violations() {
    let Some(tools) = tools() else { return };
    let run = sample_run();
    for id in PARTICIPANTS {
        let html = run.read(&format!("participants/{id}.html"));
        for width in WIDTHS {
            let found = axe_check(&tools, &html, width);
            assert!(
                found.violations.is_empty(),
                "{id}.html at {width} px:\n{}",
                describe(&found.violations)
            );
            // Charts reflow and tables fit: nothing scrolls sideways, not even at phone width.
            assert!(
                found.overflow.is_empty(),
                "{id}.html at {width} px: {:?}",
                found.overflow
            );
        }
    }
}

/// The group page: every rule passes at every width, and nothing scrolls sideways. The
/// month-over-month table (five columns) scrolled 379 px in 351 px at 390 px; it is stacked, a
/// block per month, below 721 px.
#[test]
fn group_report_has_no_axe_violations() {
    let Some(tools) = tools() else { return };
    let html = sample_run().read("group/program.html");
    assert!(
        !html.contains("<figure role=\"img\""),
        "figures keep their captions"
    );
    for width in WIDTHS {
        let check = axe_check(&tools, &html, width);
        let found = check.violations;
        assert!(
            found.is_empty(),
            "group/program.html at {width} px:\n{}",
            describe(&found)
        );
        assert!(
            check.overflow.is_empty(),
            "group at {width} px: {:?}",
            check.overflow
        );
    }
}

/// The clinician follow-up list (seven columns, about 600 px wide as a table): no axe violation
/// and nothing scrolling sideways at any width. As a table it scrolled 542 px in 351 px at
/// 390 px and 603 px in 589 px at 640 px; below 721 px each flag is now a block of its own, each
/// cell labelled with its column's heading, and the table stays a table (`th scope="col"` in a
/// visually hidden header row).
#[test]
fn followup_list_has_no_axe_violations_and_no_table_scrolls_sideways() {
    let Some(tools) = tools() else { return };
    let t = crate::harness::ProgramTest::sample();
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    std::fs::write(
        &yaml,
        format!("{text}\nfollowup:\n  recipient: \"Nurse\"\n"),
    )
    .unwrap();
    let out = t.dir.parent().unwrap().join("out");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-07-01",
        "--formats",
        "html",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert_eq!(
        r.code, 4,
        "the sample's planted folder without a profile: {r:?}"
    );
    let html = std::fs::read_to_string(out.join("followup/followup.html")).unwrap();
    // SG-010 is flagged (low intake) in the sample's June, so the list is not empty.
    assert!(html.contains(">SG-010</td>"), "{html}");
    for width in WIDTHS {
        let found = axe_check(&tools, &html, width);
        assert!(
            found.violations.is_empty(),
            "followup.html at {width} px:\n{}",
            describe(&found.violations)
        );
        assert!(
            found.overflow.is_empty(),
            "followup.html at {width} px: {:?}",
            found.overflow
        );
    }
    assert!(html.contains("<div class=\"table-wrap stack records\">"));
    assert!(html.contains("<td data-label=\"Participant\">SG-010</td><td data-label=\"Name\">"));
}

/// Needs no browser: a chart figure keeps its caption in the accessibility tree (no
/// `role="img"` on the `<figure>`, which would hide the caption's second sentence), and the
/// picture itself is the SVG with its own role and text alternative.
#[test]
fn participant_chart_captions_stay_readable() {
    let html = sample_run().read("participants/SG-007.html");
    assert!(!html.contains("<figure role="), "a figure still has a role");
    let figures: Vec<&str> = html.split("<figure>").skip(1).collect();
    assert_eq!(figures.len(), 3, "weight, energy and activity charts");
    for fig in figures {
        let fig = &fig[..fig.find("</figure>").expect("closed figure")];
        // Each chart is drawn wide and narrow; the style shows one of them.
        assert_eq!(fig.matches("<svg").count(), 2, "{fig:.200}");
        assert!(fig.contains("<div class=\"chart-wide\"><svg"), "{fig:.200}");
        assert!(
            fig.contains("<div class=\"chart-narrow\"><svg"),
            "{fig:.200}"
        );
        for svg in fig.split("<svg").skip(1) {
            let svg_open = &svg[..svg.find('>').unwrap()];
            assert!(svg_open.contains("role=\"img\""), "{svg_open}");
            assert!(svg_open.contains("aria-label=\""), "{svg_open}");
        }
        assert!(fig.contains("<figcaption>"), "figure without a caption");
    }
    assert!(html.contains(
        "The trend smooths out day-to-day water swings; the shaded band is its 95 % range.</figcaption>"
    ));
}

/// Chromium alone (the sideways-scroll check below needs no axe-core): `None` after printing
/// why the check is skipped; a failure instead when `COHORTPRESS_REQUIRE_AXE=1` (CI installs
/// Chromium).
fn chromium_only() -> Option<PathBuf> {
    let found = std::env::var_os("CHROMIUM")
        .map(PathBuf::from)
        .filter(|p| p.is_file())
        .or_else(|| find_on_path(&["chromium", "chromium-browser", "google-chrome"]));
    if found.is_none() {
        let why = "Chromium not found (install the `chromium` package or set CHROMIUM)";
        if std::env::var("COHORTPRESS_REQUIRE_AXE").as_deref() == Ok("1") {
            panic!("COHORTPRESS_REQUIRE_AXE=1 but {why}");
        }
        eprintln!("SKIPPED: sideways-scroll check in Chromium: {why}");
    }
    found
}

/// What the long name `long` makes scroll sideways in `html` at `width` CSS px: the page
/// itself, and each table's scroll box (`.table-wrap`) that is wider with the name than with a
/// short one put in its cells (a table with many columns may scroll on a phone anyway). Also
/// how many cells held the name.
fn widened_by(chromium: &Path, html: &str, long: &str, width: u32) -> (Vec<String>, usize) {
    const MEASURE: &str = r#"(function () {
  function widths() {
    return Array.from(document.querySelectorAll('.table-wrap')).map(function (e) { return e.scrollWidth; });
  }
  var found = [];
  var doc = document.documentElement;
  if (doc.scrollWidth > doc.clientWidth + 1) {
    found.push('page ' + doc.scrollWidth + ' px in ' + doc.clientWidth + ' px');
  }
  var withLong = widths();
  var cells = Array.from(document.querySelectorAll('td')).filter(function (td) { return td.textContent === LONG; });
  cells.forEach(function (td) { td.textContent = 'Rashid Kowalski-Hart'; });
  var withShort = widths();
  withLong.forEach(function (w, i) {
    if (w > withShort[i] + 1) {
      found.push('table ' + i + ' ' + w + ' px wide with the long name, ' + withShort[i] + ' px with a short one');
    }
  });
  var pre = document.createElement('pre');
  pre.id = 'sideways';
  pre.textContent = cells.length + '|' + found.join('|');
  document.body.appendChild(pre);
})();
"#;
    let tmp = tempfile::Builder::new()
        .prefix("cohortpress-wrap-")
        .tempdir_in(env!("CARGO_TARGET_TMPDIR"))
        .expect("temp dir");
    let dir = tmp.path();
    assert!(long.chars().all(|c| c.is_ascii_alphanumeric()));
    std::fs::write(
        dir.join("measure.js"),
        format!("var LONG = \"{long}\";\n{MEASURE}"),
    )
    .expect("write script");
    let at = html.rfind("</body>").expect("page has </body>");
    let page = format!(
        "{}<script src=\"measure.js\"></script>\n{}",
        &html[..at],
        &html[at..]
    );
    std::fs::write(dir.join("page.html"), page).expect("write page");
    let tools = Tools {
        chromium: chromium.to_path_buf(),
        axe: PathBuf::new(),
    };
    let dom = dump_dom(&tools, dir, "page.html", width, "sideways");
    let start = dom
        .find("<pre id=\"sideways\">")
        .unwrap_or_else(|| panic!("the script wrote nothing; the page ends:\n{}", tail(&dom)))
        + "<pre id=\"sideways\">".len();
    let end = start + dom[start..].find("</pre>").expect("end of result");
    let mut parts = dom[start..end].split('|');
    let cells = parts.next().unwrap().parse().expect("cell count");
    (
        parts
            .filter(|s| !s.is_empty())
            .map(str::to_string)
            .collect(),
        cells,
    )
}

/// A name of 100 letters without a space (names are capped at 100 characters) made the
/// clinician follow-up table as wide as the name: at 1000 px it scrolled sideways (1,302 px in
/// 824 px), and on a 390 px phone the flag's reason and details were pushed off to the right.
/// The id and name cells of the list now wrap long unbroken text (and keep a width of their
/// own, so short names wrap as before): the table is no wider than with a short name, and no
/// page scrolls sideways.
#[test]
fn a_long_unbroken_name_wraps_in_the_followup_list_and_the_report() {
    let Some(chromium) = chromium_only() else {
        return;
    };
    let t = crate::harness::ProgramTest::sample();
    let yaml = t.dir.join("program.yaml");
    let text = std::fs::read_to_string(&yaml).unwrap();
    std::fs::write(
        &yaml,
        format!("{text}\nfollowup:\n  recipient: \"Nurse\"\n"),
    )
    .unwrap();
    // SG-010 is flagged (low intake) in the sample's June, so the name is on the list, once.
    let name: String = "Brackenthwaiteovna".repeat(6).chars().take(100).collect();
    let profile = t.dir.join("participants/SG-010/profile.yaml");
    let p = std::fs::read_to_string(&profile).unwrap();
    let p: String = p
        .lines()
        .map(|l| {
            if l.starts_with("name:") {
                format!("name: {name}\n")
            } else {
                format!("{l}\n")
            }
        })
        .collect();
    std::fs::write(&profile, p).unwrap();
    let out = t.dir.parent().unwrap().join("out");
    let r = t.run(&[
        "run",
        "{dir}",
        "--as-of",
        "2026-07-01",
        "--formats",
        "html",
        "--out",
        &out.to_string_lossy(),
    ]);
    assert!(r.code < 6, "{r:?}");
    for (page, cells) in [
        ("followup/followup.html", 1),
        ("participants/SG-010.html", 0),
    ] {
        let html = std::fs::read_to_string(out.join(page)).unwrap();
        assert!(html.contains(&name), "{page} shows the name whole");
        for width in WIDTHS {
            let (found, held) = widened_by(&chromium, &html, &name, width);
            assert_eq!(held, cells, "{page}: cells holding the name");
            assert!(found.is_empty(), "{page} at {width} px: {found:?}");
        }
    }
}

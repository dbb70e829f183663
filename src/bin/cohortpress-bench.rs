//! `cohortpress-bench`: the benchmark suite (see BENCHMARKS.md for figures and targets).
//!
//! ```text
//! cargo run --release --bin cohortpress-bench -- [--participants 1000,10000] [--quick]
//! ```
//!
//! For each program size it generates a demo program (the repository's generator, no planted
//! defects, 183 days of data) under `target/bench-programs/`, then measures in this process:
//!
//! * loading and checking ([`cohortpress::check::check_program`]): MB/s of CSV and
//!   participants/s, with one worker thread and with all cores;
//! * the metric modules ([`cohortpress::modules::ModuleSet::run`]) per participant, in total and
//!   per module;
//! * one participant's report model, PDF and HTML ([`cohortpress::report::render_participant`],
//!   one format at a time, median over many calls);
//! * the group step (statistics with suppression, group report model, both formats);
//!
//! and, as a child process, the end-to-end run of the real release binary (`cohortpress run`,
//! every participant in PDF and HTML plus the group reports) with each `--jobs` value, with its
//! wall time and peak resident memory. Peak memory is read from `/proc/<pid>/status` (`VmHWM`,
//! the high-water mark of the resident set) every few milliseconds until the child exits, so no
//! tool beyond the Linux kernel is needed.
//!
//! Nothing here asserts a speed: the numbers are printed as a Markdown report on standard output
//! (progress goes to standard error) and compared with the targets by a reader.

use std::fmt::Write as _;
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use chrono::NaiveDate;
use clap::Parser;
use cohortpress::check;
use cohortpress::cmd::cli::{Cli, Command as CliCommand};
use cohortpress::demo::{self, DemoOptions};
use cohortpress::group::{self, GroupOptions};
use cohortpress::modules;
use cohortpress::program::Format;
use cohortpress::report;
use cohortpress::run::{RunPlan, execute};
use cohortpress_metric_api::ParticipantData;

/// Measure cohortpress: loading, metric modules, rendering and the end-to-end run.
#[derive(Debug, Parser)]
#[command(name = "cohortpress-bench")]
struct Args {
    /// Program sizes (participants, 183 days each), comma-separated.
    #[arg(long, value_delimiter = ',', default_value = "1000")]
    participants: Vec<usize>,
    /// `--jobs` values of the end-to-end runs (default 1,2; with --quick only 2).
    #[arg(long, value_delimiter = ',')]
    jobs: Vec<usize>,
    /// Fewer repetitions and only `--jobs 2` end to end: a rough figure in about a minute.
    #[arg(long)]
    quick: bool,
    /// Skip the end-to-end runs (in-process measurements only).
    #[arg(long)]
    no_end_to_end: bool,
    /// The `cohortpress` binary to run end to end (default: the release binary beside this
    /// one, rebuilt first with `cargo build --release --bin cohortpress` when run by cargo).
    #[arg(long)]
    binary: Option<PathBuf>,
    /// Also time zlib levels 1–9 on the streams of one participant's PDF (what the level
    /// of the PDF writer's stream compression costs and saves).
    #[arg(long)]
    zlib_levels: bool,
    /// Seed of the generated programs.
    #[arg(long, default_value_t = 2026)]
    seed: u64,
}

/// The as-of date of every measurement: after the demo program ends (2026-09-30), so the
/// report period is its last month and every participant has all 183 days.
const AS_OF: &str = "2026-12-01";

/// Repetition counts.
struct Reps {
    /// Timed loads of the whole program (after one untimed warm-up that fills the page cache).
    load: usize,
    /// Timed passes of the modules over every participant.
    modules: usize,
    /// Participants whose reports are rendered.
    render_participants: usize,
    /// Timed renders per participant and format.
    render_each: usize,
    /// Timed group steps.
    group: usize,
}

fn main() {
    let args = Args::parse();
    if cfg!(debug_assertions) {
        eprintln!(
            "warning: this is a debug build; figures are meaningless. Use `cargo run --release --bin cohortpress-bench`."
        );
    }
    let reps = if args.quick {
        Reps {
            load: 2,
            modules: 1,
            render_participants: 10,
            render_each: 10,
            group: 2,
        }
    } else {
        Reps {
            load: 5,
            modules: 3,
            render_participants: 40,
            render_each: 25,
            group: 5,
        }
    };
    let jobs = if !args.jobs.is_empty() {
        args.jobs.clone()
    } else if args.quick {
        vec![2]
    } else {
        vec![1, 2]
    };
    let bench_dir = target_dir().join("bench-programs");
    std::fs::create_dir_all(&bench_dir).unwrap_or_else(|e| die(&format!("{bench_dir:?}: {e}")));
    let binary = if args.no_end_to_end {
        None
    } else {
        Some(args.binary.clone().unwrap_or_else(release_binary))
    };

    let mut md = String::new();
    let _ = writeln!(md, "## Machine\n");
    for line in machine() {
        let _ = writeln!(md, "- {line}");
    }
    let _ = writeln!(
        md,
        "- build: {}",
        if cfg!(debug_assertions) {
            "DEBUG (not meaningful)"
        } else {
            "release"
        }
    );
    let _ = writeln!(
        md,
        "- command: `cargo run --release --bin cohortpress-bench -- {}`",
        std::env::args().skip(1).collect::<Vec<_>>().join(" ")
    );
    print!("{md}");

    let mut e2e_peaks: Vec<(usize, usize, u64)> = Vec::new();
    for &n in &args.participants {
        let program = bench_dir.join(format!("p{n}"));
        let section = bench_size(
            n,
            &program,
            &args,
            &reps,
            &jobs,
            binary.as_deref(),
            &bench_dir,
            &mut e2e_peaks,
        );
        print!("{section}");
    }

    // The memory target compares the largest size with the smallest, per --jobs value.
    let mut out = String::new();
    let sizes: Vec<usize> = {
        let mut s: Vec<usize> = e2e_peaks.iter().map(|p| p.0).collect();
        s.sort_unstable();
        s.dedup();
        s
    };
    if sizes.len() >= 2 {
        let (lo, hi) = (sizes[0], sizes[sizes.len() - 1]);
        let _ = writeln!(out, "\n## Peak memory, {hi} vs {lo} participants\n");
        let _ = writeln!(
            out,
            "| --jobs | peak RSS at {lo} | peak RSS at {hi} | ratio |"
        );
        let _ = writeln!(out, "|---:|---:|---:|---:|");
        for &j in &jobs {
            let find = |n| e2e_peaks.iter().find(|p| p.0 == n && p.1 == j).map(|p| p.2);
            if let (Some(a), Some(b)) = (find(lo), find(hi)) {
                let _ = writeln!(
                    out,
                    "| {j} | {} | {} | {:.2} |",
                    mib(a),
                    mib(b),
                    b as f64 / a as f64
                );
            }
        }
    }
    print!("{out}");
}

/// Every measurement for one program size, as a Markdown section.
// Each argument is one independent setting of the benchmark run; a struct would only rename them.
#[allow(clippy::too_many_arguments)]
fn bench_size(
    n: usize,
    program: &Path,
    args: &Args,
    reps: &Reps,
    jobs: &[usize],
    binary: Option<&Path>,
    bench_dir: &Path,
    e2e_peaks: &mut Vec<(usize, usize, u64)>,
) -> String {
    let mut md = String::new();
    let _ = writeln!(md, "\n## {n} participants × 183 days\n");

    // Generate.
    progress(&format!(
        "generating {n} participants into {}",
        program.display()
    ));
    let t = Instant::now();
    let summary = demo::generate(
        program,
        &DemoOptions {
            participants: n,
            seed: args.seed,
            with_defects: false,
        },
    )
    .unwrap_or_else(|e| die(&format!("generating {}: {e}", program.display())));
    let gen_s = t.elapsed().as_secs_f64();
    let (csv_bytes, csv_files, other_bytes) = input_sizes(&program.join("participants"));
    let _ = writeln!(
        md,
        "Program: `{}` (generated in {gen_s:.1} s): {} files, {} of CSV in {csv_files} files, {} of profile.yaml.\n",
        program.display(),
        summary.files,
        mb(csv_bytes),
        mb(other_bytes),
    );

    let as_of: NaiveDate = AS_OF.parse().expect("valid date");

    // Loading and checking, with one thread and with every core.
    let _ = writeln!(md, "### Loading and checking (`check::check_program`)\n");
    let _ = writeln!(md, "| threads | median time | CSV MB/s | participants/s |");
    let _ = writeln!(md, "|---:|---:|---:|---:|");
    let cores = std::thread::available_parallelism().map_or(1, |c| c.get());
    let mut thread_counts = vec![1];
    if cores > 1 {
        thread_counts.push(cores);
    }
    let mut loaded = None;
    for threads in thread_counts {
        progress(&format!("load+check, {threads} thread(s)"));
        let pool = rayon::ThreadPoolBuilder::new()
            .num_threads(threads)
            .build()
            .expect("thread pool");
        // Untimed warm-up: fills the page cache, so the figure is parsing and checking, not the disk.
        let warm = pool.install(|| check::check_program(program, as_of));
        let mut times = Vec::new();
        for _ in 0..reps.load {
            let t = Instant::now();
            let r = pool.install(|| check::check_program(program, as_of));
            times.push(t.elapsed().as_secs_f64());
            drop(r);
        }
        let s = median(&mut times);
        let _ = writeln!(
            md,
            "| {threads} | {} | {:.0} | {:.0} |",
            secs(s),
            csv_bytes as f64 / 1e6 / s,
            n as f64 / s
        );
        loaded = Some(warm);
    }
    let loaded = loaded.expect("at least one load");
    if let Err(d) = &loaded.program {
        die(&format!("the generated program is invalid: {d:?}"));
    }
    let (errors, warnings) = loaded.counts();
    let data: Vec<&ParticipantData> = loaded
        .participants
        .iter()
        .filter_map(|p| p.data.as_ref())
        .collect();
    let _ = writeln!(
        md,
        "\n{} of {n} participants usable; {errors} errors, {warnings} warnings (page cache warm; median of {}).\n",
        data.len(),
        reps.load
    );

    // The plan exactly as `cohortpress run` resolves it.
    let plan = plan_for(program, &bench_dir.join("unused-out"));

    // Metric modules: the whole set, then prefixes of it for a per-module breakdown (modules
    // run in order and each sees only earlier outputs, so prefix k minus prefix k−1 is module k).
    progress("metric modules");
    let ids: Vec<String> = plan
        .program
        .def
        .modules
        .iter()
        .map(|m| m.id.clone())
        .collect();
    let mut prefix_us = Vec::new();
    for k in 1..=ids.len() {
        let mut prog = plan.program.clone();
        prog.def.modules.truncate(k);
        let (set, _) =
            modules::build_module_set(&prog).unwrap_or_else(|d| die(&format!("module set: {d:?}")));
        let mut times = Vec::new();
        for _ in 0..reps.modules {
            let t = Instant::now();
            let mut failures = 0;
            for d in &data {
                let r = set.run(&plan.program.info, plan.period, plan.as_of, d);
                failures += r.failures.len();
                std::hint::black_box(&r);
            }
            times.push(t.elapsed().as_secs_f64());
            if failures > 0 {
                progress(&format!(
                    "note: {failures} module failures with {k} module(s)"
                ));
            }
        }
        // The fastest pass: the per-module figures are differences of these totals, and on a
        // shared machine the minimum is the least disturbed estimate.
        prefix_us.push(percentile(&mut times, 0.0) / data.len() as f64 * 1e6);
    }
    let _ = writeln!(
        md,
        "### Metric modules (`ModuleSet::run`, one thread, fastest of {} passes)\n\n| module | µs per participant |\n|---|---:|",
        reps.modules
    );
    let mut prev = 0.0;
    for (id, &us) in ids.iter().zip(&prefix_us) {
        let _ = writeln!(md, "| {id} | {:.0} |", us - prev);
        prev = us;
    }
    let _ = writeln!(
        md,
        "| **all {}** | **{:.0}** |\n",
        ids.len(),
        prefix_us.last().copied().unwrap_or(0.0)
    );

    // One participant's report: model, PDF, HTML.
    progress("participant reports");
    let templates = report::templates::TemplateSet::load(&plan.program)
        .unwrap_or_else(|e| die(&format!("templates: {e}")));
    let sample: Vec<&ParticipantData> = data
        .iter()
        .copied()
        .take(reps.render_participants)
        .collect();
    let mut model_t = Vec::new();
    let mut pdf_t = Vec::new();
    let mut html_t = Vec::new();
    let mut pdf_pages = Vec::new();
    let mut pdf_bytes = Vec::new();
    let mut html_bytes = Vec::new();
    let mut charts = Vec::new();
    let mut first_t: [Vec<f64>; 2] = [Vec::new(), Vec::new()];
    for d in &sample {
        let results = plan
            .modules
            .run(&plan.program.info, plan.period, plan.as_of, d);
        let diags = Vec::new();
        let t = Instant::now();
        let ctx = report::participant_context(&plan.report_scope(), d, &results, &diags);
        model_t.push(t.elapsed().as_secs_f64());
        charts
            .push(1 + ctx.energy_chart.is_some() as usize + ctx.activity_chart.is_some() as usize);
        for (format, times) in [(Format::Pdf, &mut pdf_t), (Format::Html, &mut html_t)] {
            // The first call of each participant is timed apart: it includes first-use
            // initialisation (font parsing, once per process) and runs with cold caches, as in
            // a real run where each report is rendered once.
            let t = Instant::now();
            let first = report::render_participant(&templates, &ctx, &[format])
                .unwrap_or_else(|e| die(&format!("render: {e}")));
            first_t[usize::from(format == Format::Html)].push(t.elapsed().as_secs_f64());
            let bytes = &first[0].1;
            match format {
                Format::Pdf => {
                    pdf_bytes.push(bytes.len() as f64);
                    pdf_pages.push(pdf_page_count(bytes) as f64);
                }
                Format::Html => html_bytes.push(bytes.len() as f64),
            }
            for _ in 0..reps.render_each {
                let t = Instant::now();
                let out = report::render_participant(&templates, &ctx, &[format]);
                times.push(t.elapsed().as_secs_f64());
                std::hint::black_box(out).ok();
            }
        }
    }
    let _ = writeln!(
        md,
        "### One participant's report (`report::render_participant`, one format per call, one thread)\n\n\
         {} participants × {} calls per format; charts per report: {}; PDF pages: {}.\n\n\
         | step | median | 90th percentile | output size (median) |\n|---|---:|---:|---:|",
        sample.len(),
        reps.render_each,
        range(&charts.iter().map(|&c| c as f64).collect::<Vec<_>>()),
        range(&pdf_pages),
    );
    let _ = writeln!(
        md,
        "| report model (`report::participant_context`) | {} | {} | |",
        ms(median(&mut model_t.clone())),
        ms(percentile(&mut model_t, 0.9))
    );
    let _ = writeln!(
        md,
        "| PDF | {} | {} | {} |",
        ms(median(&mut pdf_t.clone())),
        ms(percentile(&mut pdf_t, 0.9)),
        kb(median(&mut pdf_bytes))
    );
    // Skip the very first participant (font parsing) in the first-call figures.
    for (name, t) in [("PDF", &first_t[0]), ("HTML", &first_t[1])] {
        let mut t: Vec<f64> = t.iter().skip(1).copied().collect();
        let _ = writeln!(
            md,
            "| {name}, first call for each participant | {} | {} | |",
            ms(median(&mut t.clone())),
            ms(percentile(&mut t, 0.9))
        );
    }
    let _ = writeln!(
        md,
        "| HTML (charts drawn as SVG included) | {} | {} | {} |\n",
        ms(median(&mut html_t.clone())),
        ms(percentile(&mut html_t, 0.9)),
        kb(median(&mut html_bytes))
    );

    if args.zlib_levels
        && let Some(d) = sample.first()
    {
        let results = plan
            .modules
            .run(&plan.program.info, plan.period, plan.as_of, d);
        let ctx = report::participant_context(&plan.report_scope(), d, &results, &[]);
        let pdf = report::render_participant(&templates, &ctx, &[Format::Pdf])
            .unwrap_or_else(|e| die(&format!("render: {e}")));
        let _ = writeln!(md, "{}", zlib_levels(&pdf[0].1));
    }

    // The group step over every participant's summary row.
    progress("group step");
    let rows: Vec<_> = data
        .iter()
        .map(|d| {
            let results = plan
                .modules
                .run(&plan.program.info, plan.period, plan.as_of, d);
            execute::summary_row(&plan, d, &results)
        })
        .collect();
    let opts = GroupOptions {
        min_cell_size: plan.program.def.privacy.min_cell_size,
        group_by: plan.program.def.report.group_by.clone(),
        confidence: 0.95,
    };
    let mut stats_t = Vec::new();
    let mut group_render_t = Vec::new();
    for _ in 0..reps.group {
        let t = Instant::now();
        let g = group::summarize(&rows, &opts);
        stats_t.push(t.elapsed().as_secs_f64());
        let t = Instant::now();
        let ctx = report::group_context(&plan.report_scope(), &g, 0);
        let files = report::render_group(&templates, &ctx, &[Format::Html, Format::Pdf])
            .unwrap_or_else(|e| die(&format!("group render: {e}")));
        group_render_t.push(t.elapsed().as_secs_f64());
        std::hint::black_box(files);
    }
    let _ = writeln!(
        md,
        "### Group step (one thread)\n\n| step | median |\n|---|---:|\n\
         | statistics with small-cell suppression (`group::summarize`, {} rows) | {} |\n\
         | group report model, HTML and PDF | {} |\n",
        rows.len(),
        ms(median(&mut stats_t)),
        ms(median(&mut group_render_t)),
    );
    drop(rows);
    drop(data);
    drop(loaded);

    // End to end, the real binary as a child process.
    if let Some(binary) = binary {
        let _ = writeln!(
            md,
            "### End to end (`cohortpress run {} --as-of {AS_OF} --jobs J`, PDF + HTML for everyone, group reports, tidy files)\n\n\
             | --jobs | wall time | participants/s | peak RSS | output | phases (from the run's log) |\n|---:|---:|---:|---:|---:|---|",
            program.display()
        );
        for &j in jobs {
            progress(&format!("end to end, --jobs {j}"));
            let out = bench_dir.join(format!("out-p{n}-j{j}"));
            let r = end_to_end(binary, program, &out, j);
            let _ = writeln!(
                md,
                "| {j} | {} | {:.0} | {} | {} in {} files | {} |",
                secs(r.wall_s),
                n as f64 / r.wall_s,
                mib(r.peak_rss_kb),
                mb(r.out_bytes),
                r.out_files,
                r.phases
            );
            e2e_peaks.push((n, j, r.peak_rss_kb));
            // The outputs of 10,000 participants take about 2 GB: do not keep them.
            let _ = std::fs::remove_dir_all(&out);
            let _ = std::fs::remove_dir_all(out.with_extension("ledger"));
        }
    }
    md
}

/// Decompresses every stream of `pdf` and times zlib at each level on them (a Markdown table).
fn zlib_levels(pdf: &[u8]) -> String {
    use std::io::Write as _;
    let mut doc = lopdf::Document::load_mem(pdf).unwrap_or_else(|e| die(&format!("pdf: {e}")));
    doc.decompress();
    let streams: Vec<Vec<u8>> = doc
        .objects
        .values()
        .filter_map(|o| o.as_stream().ok().map(|s| s.content.clone()))
        .filter(|c| c.len() >= 64)
        .collect();
    let raw: usize = streams.iter().map(Vec::len).sum();
    let mut md = format!(
        "#### zlib level on one PDF's streams ({} streams, {} uncompressed)\n\n| level | ms per PDF | compressed |\n|---:|---:|---:|\n",
        streams.len(),
        kb(raw as f64)
    );
    for level in 1..=9 {
        let mut times = Vec::new();
        let mut size = 0;
        for _ in 0..20 {
            let t = Instant::now();
            size = 0;
            for s in &streams {
                let mut enc =
                    flate2::write::ZlibEncoder::new(Vec::new(), flate2::Compression::new(level));
                enc.write_all(s).expect("in memory");
                size += enc.finish().expect("in memory").len();
            }
            times.push(t.elapsed().as_secs_f64());
        }
        let _ = writeln!(
            md,
            "| {level} | {} | {} |",
            ms(median(&mut times)),
            kb(size as f64)
        );
    }
    md
}

/// The resolved run plan for `program`, parsed from the same command line a user would type.
fn plan_for(program: &Path, out: &Path) -> RunPlan {
    let argv = [
        "cohortpress",
        "run",
        &program.to_string_lossy(),
        "--as-of",
        AS_OF,
        "--out",
        &out.to_string_lossy(),
    ];
    let cli = Cli::try_parse_from(argv).unwrap_or_else(|e| die(&e.to_string()));
    let CliCommand::Run(run_args) = cli.command else {
        die("expected the run command")
    };
    let today: NaiveDate = AS_OF.parse().expect("valid date");
    cohortpress::run::plan::plan(&cohortpress::cmd::run::run_options(&run_args), today)
        .unwrap_or_else(|e| die(&format!("plan: {e}")))
}

struct EndToEnd {
    wall_s: f64,
    peak_rss_kb: u64,
    out_bytes: u64,
    out_files: u64,
    phases: String,
}

/// Runs the binary on `program` into a fresh `out`, polling its peak resident set.
fn end_to_end(binary: &Path, program: &Path, out: &Path, jobs: usize) -> EndToEnd {
    let _ = std::fs::remove_dir_all(out);
    // A fresh ledger of its own for every run (`--state`, `--new-ledger`), so each run is a first release
    // whatever ran before: without it, every run would add a release to the program's own
    // ledger (`reports.ledger` in the generated program) and be audited against the last.
    let state = out.with_extension("ledger");
    let _ = std::fs::remove_dir_all(&state);
    let log = out.with_extension("log");
    let log_file = std::fs::File::create(&log).unwrap_or_else(|e| die(&format!("{log:?}: {e}")));
    let t = Instant::now();
    let mut child = Command::new(binary)
        .arg("run")
        .arg(program)
        .args([
            "--as-of",
            AS_OF,
            "--jobs",
            &jobs.to_string(),
            "--log-format",
            "json",
        ])
        .arg("--out")
        .arg(out)
        .arg("--state")
        .arg(&state)
        // Meant: the output folders of earlier bench runs beside it record this program in
        // ledgers of their own, which a fresh ledger would otherwise be refused beside.
        .arg("--new-ledger")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(log_file)
        .spawn()
        .unwrap_or_else(|e| die(&format!("cannot start {}: {e}", binary.display())));
    let status_path = format!("/proc/{}/status", child.id());
    let mut peak = 0u64;
    let status = loop {
        // VmHWM only grows, so the last reading before exit is the peak up to a few ms before
        // exit; the end of a run (writing the manifest, renaming folders) allocates little.
        if let Ok(s) = std::fs::read_to_string(&status_path)
            && let Some(kb) = status_field_kb(&s, "VmHWM:")
        {
            peak = peak.max(kb);
        }
        if let Some(st) = child.try_wait().expect("waiting for the run") {
            break st;
        }
        std::thread::sleep(Duration::from_millis(5));
    };
    let wall_s = t.elapsed().as_secs_f64();
    let log_text = std::fs::read_to_string(&log).unwrap_or_default();
    // 0 = clean, 1 = warnings: both mean every report was written.
    if !matches!(status.code(), Some(0 | 1)) {
        die(&format!(
            "the run failed ({status}); its log is {}:\n{}",
            log.display(),
            log_text
                .lines()
                .rev()
                .take(20)
                .collect::<Vec<_>>()
                .join("\n")
        ));
    }
    let (out_bytes, out_files) = dir_size(out);
    EndToEnd {
        wall_s,
        peak_rss_kb: peak,
        out_bytes,
        out_files,
        phases: phases_from_log(&log_text),
    }
}

/// The per-phase seconds the runner logs (JSON log lines with a `participants_s` field).
fn phases_from_log(log: &str) -> String {
    for line in log.lines() {
        let Ok(v) = serde_json::from_str::<serde_json::Value>(line) else {
            continue;
        };
        let Some(f) = v.get("fields") else { continue };
        if f.get("participants_s").is_none() {
            continue;
        }
        let names = ["plan_s", "participants_s", "group_s", "tidy_s", "commit_s"];
        return names
            .iter()
            .filter_map(|k| {
                f.get(*k)
                    .and_then(|x| x.as_f64())
                    .map(|x| format!("{} {x:.2} s", k.trim_end_matches("_s")))
            })
            .collect::<Vec<_>>()
            .join(", ");
    }
    String::new()
}

fn status_field_kb(status: &str, field: &str) -> Option<u64> {
    let line = status.lines().find(|l| l.starts_with(field))?;
    line[field.len()..].split_whitespace().next()?.parse().ok()
}

/// (bytes of CSV, CSV files, bytes of other files) under `dir`.
fn input_sizes(dir: &Path) -> (u64, u64, u64) {
    let (mut csv, mut files, mut other) = (0, 0, 0);
    for e in walkdir::WalkDir::new(dir).into_iter().flatten() {
        if !e.file_type().is_file() {
            continue;
        }
        let len = e.metadata().map_or(0, |m| m.len());
        if e.path().extension().is_some_and(|x| x == "csv") {
            csv += len;
            files += 1;
        } else {
            other += len;
        }
    }
    (csv, files, other)
}

fn dir_size(dir: &Path) -> (u64, u64) {
    let (mut bytes, mut files) = (0, 0);
    for e in walkdir::WalkDir::new(dir).into_iter().flatten() {
        if e.file_type().is_file() {
            bytes += e.metadata().map_or(0, |m| m.len());
            files += 1;
        }
    }
    (bytes, files)
}

fn pdf_page_count(bytes: &[u8]) -> usize {
    lopdf::Document::load_mem(bytes).map_or(0, |d| d.get_pages().len())
}

/// The cargo target folder: this binary lives in `target/<profile>/`.
fn target_dir() -> PathBuf {
    if let Some(t) = std::env::var_os("CARGO_TARGET_DIR") {
        return PathBuf::from(t);
    }
    std::env::current_exe()
        .ok()
        .and_then(|e| Some(e.parent()?.parent()?.to_path_buf()))
        .unwrap_or_else(|| PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("target"))
}

/// `cohortpress` beside this binary; when run by `cargo run`, rebuilt first so it matches the
/// source being measured.
fn release_binary() -> PathBuf {
    let exe = std::env::current_exe().unwrap_or_else(|e| die(&format!("current_exe: {e}")));
    let bin = exe.with_file_name("cohortpress");
    if let Some(cargo) = std::env::var_os("CARGO") {
        progress("cargo build --release --bin cohortpress");
        let ok = Command::new(cargo)
            .args(["build", "--release", "--bin", "cohortpress"])
            .current_dir(env!("CARGO_MANIFEST_DIR"))
            .status()
            .is_ok_and(|s| s.success());
        if !ok {
            die("building the cohortpress binary failed");
        }
    }
    if !bin.is_file() {
        die(&format!(
            "{} not found: build it with `cargo build --release --bin cohortpress`, or pass --binary",
            bin.display()
        ));
    }
    bin
}

/// Machine description lines: cores, CPU, memory, compiler.
fn machine() -> Vec<String> {
    let cpuinfo = std::fs::read_to_string("/proc/cpuinfo").unwrap_or_default();
    let cpu = cpuinfo
        .lines()
        .find(|l| l.starts_with("model name"))
        .and_then(|l| l.split_once(':'))
        .map_or("unknown".to_string(), |(_, v)| v.trim().to_string());
    let meminfo = std::fs::read_to_string("/proc/meminfo").unwrap_or_default();
    let mem = status_field_kb(&meminfo, "MemTotal:").map_or("unknown".into(), |kb| {
        format!("{:.1} GiB", kb as f64 / 1024.0 / 1024.0)
    });
    let rustc = Command::new(std::env::var_os("RUSTC").unwrap_or_else(|| "rustc".into()))
        .arg("-V")
        .output()
        .ok()
        .map(|o| String::from_utf8_lossy(&o.stdout).trim().to_string())
        .unwrap_or_else(|| "unknown".into());
    vec![
        format!(
            "cores (available parallelism): {}",
            std::thread::available_parallelism().map_or(1, |c| c.get())
        ),
        format!("CPU: {cpu}"),
        format!("memory: {mem}"),
        format!("compiler: {rustc}"),
        format!("cohortpress {}", env!("CARGO_PKG_VERSION")),
    ]
}

fn median(v: &mut [f64]) -> f64 {
    percentile(v, 0.5)
}

/// Nearest-rank percentile (`q` in 0..=1); NaN for no samples.
fn percentile(v: &mut [f64], q: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    v.sort_by(f64::total_cmp);
    let i = ((q * v.len() as f64).ceil() as usize).clamp(1, v.len()) - 1;
    v[i]
}

fn range(v: &[f64]) -> String {
    let lo = v.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = v.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    if lo == hi {
        format!("{lo}")
    } else {
        format!("{lo}–{hi}")
    }
}

fn secs(s: f64) -> String {
    format!("{s:.2} s")
}

fn ms(s: f64) -> String {
    format!("{:.2} ms", s * 1e3)
}

fn mb(bytes: u64) -> String {
    format!("{:.1} MB", bytes as f64 / 1e6)
}

fn kb(bytes: f64) -> String {
    format!("{:.1} KB", bytes / 1e3)
}

fn mib(kb: u64) -> String {
    format!("{:.0} MiB", kb as f64 / 1024.0)
}

fn progress(what: &str) {
    eprintln!("[bench] {what}");
}

fn die(msg: &str) -> ! {
    eprintln!("cohortpress-bench: {msg}");
    std::process::exit(1)
}

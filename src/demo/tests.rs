//! Tests of the demo generator: determinism, file shapes, the planted defects, the simulated
//! physiology and the committed sample.

use super::sim::{CourseKind, Glycaemia, HeightWritten, Scenario, UNKNOWN_ACTIVITY};
use super::*;
use chrono::NaiveDate;
use std::collections::{BTreeMap, BTreeSet};
use std::path::PathBuf;

/// The committed sample folder.
fn sample_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("sample-program")
}

/// Regenerates the committed sample: `cargo test --lib demo -- --ignored regenerate_sample`.
#[test]
#[ignore = "writes into sample-program/; run by hand after changing the generator"]
fn regenerate_sample() {
    let s = generate(&sample_dir(), &DemoOptions::default()).unwrap();
    eprintln!("{s:?}");
}

/// Every generated file (program.yaml and participants/**), relative path → bytes.
fn read_tree(root: &Path) -> BTreeMap<String, Vec<u8>> {
    let mut files = BTreeMap::new();
    files.insert(
        "program.yaml".to_string(),
        fs::read(root.join("program.yaml")).unwrap(),
    );
    for entry in walkdir::WalkDir::new(root.join("participants")).sort_by_file_name() {
        let entry = entry.unwrap();
        if entry.file_type().is_file() {
            let rel = entry
                .path()
                .strip_prefix(root)
                .unwrap()
                .to_string_lossy()
                .replace('\\', "/");
            files.insert(rel, fs::read(entry.path()).unwrap());
        }
    }
    files
}

/// blake3 over every relative path and its bytes, in path order.
fn tree_hash(root: &Path) -> String {
    let mut h = blake3::Hasher::new();
    for (path, bytes) in read_tree(root) {
        h.update(path.as_bytes());
        h.update(&(bytes.len() as u64).to_le_bytes());
        h.update(&bytes);
    }
    h.finalize().to_hex().to_string()
}

fn generated(opts: &DemoOptions) -> (tempfile::TempDir, DemoSummary) {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("demo");
    let summary = generate(&out, opts).unwrap();
    (dir, summary)
}

fn demo_root(dir: &tempfile::TempDir) -> PathBuf {
    dir.path().join("demo")
}

/// Rows of a CSV file (header included), split naively: only the planted decimal comma is
/// quoted, and tests that need quoting use the csv crate.
fn csv_rows(bytes: &[u8]) -> Vec<Vec<String>> {
    let mut r = csv::ReaderBuilder::new()
        .has_headers(false)
        .flexible(true)
        .from_reader(bytes);
    r.records()
        .map(|rec| rec.unwrap().iter().map(str::to_string).collect())
        .collect()
}

#[test]
fn same_seed_gives_identical_bytes() {
    let (a, sa) = generated(&DemoOptions::default());
    let (b, sb) = generated(&DemoOptions::default());
    assert_eq!(sa, sb);
    assert_eq!(tree_hash(&demo_root(&a)), tree_hash(&demo_root(&b)));
}

#[test]
fn different_seeds_give_different_data() {
    let (a, _) = generated(&DemoOptions::default());
    let (b, _) = generated(&DemoOptions {
        seed: 2027,
        ..DemoOptions::default()
    });
    assert_ne!(tree_hash(&demo_root(&a)), tree_hash(&demo_root(&b)));
    // Not only somewhere: the first participant's weigh-ins differ too.
    let w = |d: &tempfile::TempDir| fs::read(demo_root(d).join("participants/SG-001/weights.csv"));
    assert_ne!(w(&a).unwrap(), w(&b).unwrap());
}

#[test]
fn summary_counts_what_is_on_disk() {
    let (dir, s) = generated(&DemoOptions::default());
    let tree = read_tree(&demo_root(&dir));
    assert_eq!(s.participants, 50);
    assert_eq!(s.files, tree.len());
    assert_eq!(s.bytes, tree.values().map(|b| b.len() as u64).sum::<u64>());
    let folders: BTreeSet<&str> = tree.keys().filter_map(|k| k.split('/').nth(1)).collect();
    // 48 participants, the planted folder without a profile, and the two showcase
    // participants after it.
    assert_eq!(folders.len(), 51);
    assert!(folders.contains("SG-001") && folders.contains("SG-048") && folders.contains("SG-049"));
    assert!(folders.contains("SG-050") && folders.contains("SG-051"));
    let profiles = tree.keys().filter(|k| k.ends_with("/profile.yaml")).count();
    assert_eq!(profiles, 50);

    let (dir, s) = generated(&DemoOptions {
        participants: 7,
        seed: 1,
        with_defects: false,
    });
    let tree = read_tree(&demo_root(&dir));
    assert_eq!(s.participants, 7);
    let folders: BTreeSet<&str> = tree.keys().filter_map(|k| k.split('/').nth(1)).collect();
    assert_eq!(folders.len(), 7);
}

#[test]
fn the_showcase_participants_lose_fast_and_are_over_70() {
    // The sample's demo of the cautions the drawn cohort never reaches: SG-050 loses more than
    // 1 % of her body weight a week, truly, through September (the run flags it as a loss
    // above 1 kg a week: tests/testsuite/guidance.rs); SG-051 is
    // 70 or over in September. Without planted errors neither is added.
    let scenario = Scenario::steady_ground();
    let plans = sim::plan_cohort(48, 2026, true);
    assert_eq!(plans.len(), 50);
    let fast = sim::simulate(&plans[48], &scenario, 2026);
    assert_eq!(fast.plan.id, "SG-050");
    let sep1 = (sim::date(2026, 9, 1) - fast.enrolled).num_days() as usize;
    let tw = &fast.true_weight;
    for d in (sep1..tw.len() - 7).step_by(7) {
        let week = tw[d] - tw[d + 7];
        assert!(week > 0.01 * tw[d], "day {d}: {week} kg");
    }
    let older = sim::simulate(&plans[49], &scenario, 2026);
    assert_eq!(older.plan.id, "SG-051");
    assert!(older.age >= 70, "{}", older.age);
    assert_eq!(sim::plan_cohort(48, 2026, false).len(), 48);
}

#[test]
fn every_csv_parses_with_the_contract_header() {
    let (dir, _) = generated(&DemoOptions::default());
    let allowed: BTreeMap<&str, (&[&str], &[&str])> = BTreeMap::from([
        (
            "weights.csv",
            (&["date", "weight", "unit", "source"][..], &["time"][..]),
        ),
        (
            "intake.csv",
            (
                &["date", "kcal"][..],
                &["carbs_g", "fat_g", "protein_g", "free_sugars_g"][..],
            ),
        ),
        (
            "activity.csv",
            (
                &["date", "activity", "minutes", "met", "steps"][..],
                &[][..],
            ),
        ),
        (
            "sessions.csv",
            (&["date", "session", "attended"][..], &[][..]),
        ),
        (
            "labs.csv",
            (&["date", "test", "value", "unit"][..], &[][..]),
        ),
    ]);
    let mut seen_layouts = BTreeSet::new();
    let mut csv_files = 0;
    for (path, bytes) in read_tree(&demo_root(&dir)) {
        let Some(name) = path.rsplit('/').next().filter(|n| n.ends_with(".csv")) else {
            continue;
        };
        csv_files += 1;
        let (required, optional) = allowed[name];
        let mut reader = csv::ReaderBuilder::new()
            .flexible(true)
            .from_reader(&bytes[..]);
        let header: Vec<String> = reader
            .headers()
            .unwrap()
            .iter()
            .map(str::to_string)
            .collect();
        for col in required {
            assert!(
                header.iter().any(|h| h == col),
                "{path}: no `{col}` in {header:?}"
            );
        }
        for h in &header {
            assert!(
                required.contains(&h.as_str()) || optional.contains(&h.as_str()),
                "{path}: {h}"
            );
        }
        if name == "intake.csv" {
            seen_layouts.insert(header.join(","));
        }
        let mut rows = 0;
        for record in reader.records() {
            record.unwrap();
            rows += 1;
        }
        assert!(rows > 0, "{path} has no rows");
    }
    assert!(csv_files > 48 * 4, "{csv_files}");
    // Plain, with macros, and the two reordered layouts.
    assert_eq!(seen_layouts.len(), 4, "{seen_layouts:?}");
}

/// Counts of each planted defect found by scanning the files the way a checker would.
#[derive(Debug, Default, PartialEq, Eq)]
struct DefectCounts {
    lb_in_kg: usize,
    decimal_comma: usize,
    impossible_weight: usize,
    future_date: usize,
    missing_field: usize,
    duplicate_intake: usize,
    unknown_activity: usize,
    no_profile: usize,
}

fn count_defects(root: &Path) -> DefectCounts {
    let today = NaiveDate::from_ymd_opt(2026, 12, 2).unwrap();
    let known: BTreeSet<&str> = people::ACTIVITIES.iter().map(|a| a.code).collect();
    let tree = read_tree(root);
    let mut c = DefectCounts::default();
    let folders: BTreeSet<&str> = tree.keys().filter_map(|k| k.split('/').nth(1)).collect();
    c.no_profile = folders
        .iter()
        .filter(|f| !tree.contains_key(&format!("participants/{f}/profile.yaml")))
        .count();
    for (path, bytes) in &tree {
        if !path.ends_with(".csv") {
            continue;
        }
        let rows = csv_rows(bytes);
        let header = &rows[0];
        let col = |name: &str| header.iter().position(|h| h == name);
        let body = &rows[1..];
        c.missing_field += body.iter().filter(|r| r.len() != header.len()).count();
        let date_col = col("date").unwrap();
        c.future_date += body
            .iter()
            .filter(|r| {
                r.get(date_col)
                    .and_then(|d| d.parse::<NaiveDate>().ok())
                    .unwrap()
                    > today
            })
            .count();
        if path.ends_with("weights.csv") {
            let (wc, uc) = (col("weight").unwrap(), col("unit").unwrap());
            c.decimal_comma += body.iter().filter(|r| r[wc].contains(',')).count();
            let kg: Vec<f64> = body
                .iter()
                .filter(|r| r.len() == header.len() && r[uc] == "kg")
                .filter_map(|r| r[wc].parse().ok())
                .collect();
            if !kg.is_empty() {
                let mut sorted = kg.clone();
                sorted.sort_by(f64::total_cmp);
                let median = sorted[sorted.len() / 2];
                c.lb_in_kg += kg.iter().filter(|&&w| w > 1.8 * median).count();
                c.impossible_weight += kg.iter().filter(|&&w| w < 20.0).count();
            }
            // Nothing impossible in lb files (20 kg ≈ 44 lb).
            c.impossible_weight += body
                .iter()
                .filter(|r| r.len() == header.len() && r[uc] == "lb")
                .filter(|r| r[wc].parse::<f64>().unwrap() < 44.0)
                .count();
        }
        if path.ends_with("intake.csv") {
            let mut seen = BTreeSet::new();
            c.duplicate_intake += body.iter().filter(|r| !seen.insert(r.join(","))).count();
        }
        if path.ends_with("activity.csv") {
            let (ac, mc) = (col("activity").unwrap(), col("met").unwrap());
            for r in body {
                let listed = known.contains(r[ac].as_str());
                if !listed && r[mc].is_empty() {
                    assert_eq!(r[ac], UNKNOWN_ACTIVITY, "{path}");
                    c.unknown_activity += 1;
                }
                // A listed code never carries its own MET; a custom label always does.
                assert!(
                    listed == r[mc].is_empty() || r[ac] == UNKNOWN_ACTIVITY,
                    "{path}: {r:?}"
                );
            }
        }
    }
    c
}

#[test]
fn planted_defects_appear_exactly_once() {
    let (dir, _) = generated(&DemoOptions::default());
    let once = DefectCounts {
        lb_in_kg: 1,
        decimal_comma: 1,
        impossible_weight: 1,
        future_date: 1,
        missing_field: 1,
        duplicate_intake: 1,
        unknown_activity: 1,
        no_profile: 1,
    };
    assert_eq!(count_defects(&demo_root(&dir)), once);
    // The future date is a year typo (2027), not a date far out.
    let tree = read_tree(&demo_root(&dir));
    let typo = tree
        .iter()
        .filter(|(p, _)| p.ends_with("weights.csv"))
        .flat_map(|(_, b)| {
            String::from_utf8_lossy(b)
                .lines()
                .map(str::to_string)
                .collect::<Vec<_>>()
        })
        .filter(|l| l.starts_with("2027-"))
        .count();
    assert_eq!(typo, 1);
    // A different seed puts them on other people but still exactly once each.
    let (dir, _) = generated(&DemoOptions {
        seed: 77,
        participants: 30,
        with_defects: true,
    });
    assert_eq!(count_defects(&demo_root(&dir)), once);
}

#[test]
fn without_defects_the_data_are_clean() {
    let (dir, _) = generated(&DemoOptions {
        with_defects: false,
        ..DemoOptions::default()
    });
    assert_eq!(count_defects(&demo_root(&dir)), DefectCounts::default());
}

#[test]
fn defects_fit_into_a_tiny_cohort() {
    // Fewer participants than defects: hosts are reused, every defect is still planted once.
    let (dir, s) = generated(&DemoOptions {
        participants: 3,
        seed: 9,
        with_defects: true,
    });
    // The three drawn and the two showcase participants.
    assert_eq!(s.participants, 5);
    let c = count_defects(&demo_root(&dir));
    assert_eq!(
        (
            c.lb_in_kg,
            c.decimal_comma,
            c.impossible_weight,
            c.future_date
        ),
        (1, 1, 1, 1)
    );
    assert_eq!(
        (
            c.missing_field,
            c.duplicate_intake,
            c.unknown_activity,
            c.no_profile
        ),
        (1, 1, 1, 1)
    );
}

#[test]
fn program_yaml_follows_the_program_schema() {
    let (dir, _) = generated(&DemoOptions::default());
    let text = fs::read_to_string(demo_root(&dir).join("program.yaml")).unwrap();
    assert!(text.starts_with(write::MARKER));
    let def: crate::program::ProgramDef = serde_yaml::from_str(&text).unwrap();
    assert_eq!(def.format_version, crate::program::FORMAT_VERSION);
    assert_eq!(def.program.id, "steady-ground-2026");
    assert_eq!(def.program.title, "Steady Ground 2026");
    assert_eq!(
        def.program.sponsor.as_deref(),
        Some("Brackenridge Ceramics People & Wellbeing")
    );
    assert_eq!(
        def.program.start,
        NaiveDate::from_ymd_opt(2026, 4, 1).unwrap()
    );
    assert_eq!(
        def.program.end,
        NaiveDate::from_ymd_opt(2026, 9, 30).unwrap()
    );
    assert_eq!(def.targets.weight_change_percent, Some(-5.0));
    assert_eq!(def.targets.activity_minutes_per_week, Some(150.0));
    assert_eq!(def.targets.weigh_ins_per_week, Some(3.0));
    assert_eq!(def.targets.food_log_days_per_week, Some(5.0));
    assert_eq!(def.targets.sessions_offered, Some(16));
    let ids: Vec<&str> = def.modules.iter().map(|m| m.id.as_str()).collect();
    assert_eq!(ids, ["trend", "energy", "adherence", "outcomes"]);
    assert_eq!(def.report.group_by, ["site"]);
    assert_eq!(
        def.report.period,
        crate::program::DefaultPeriod::LastFullMonth
    );
    assert_eq!(def.report.out, PathBuf::from("reports"));
    assert_eq!(def.privacy.min_cell_size, 11);
}

#[test]
fn profiles_vary_the_way_people_write_them() {
    let (dir, _) = generated(&DemoOptions::default());
    let tree = read_tree(&demo_root(&dir));
    let profiles: Vec<String> = tree
        .iter()
        .filter(|(p, _)| p.ends_with("profile.yaml"))
        .map(|(_, b)| String::from_utf8(b.clone()).unwrap())
        .collect();
    let with = |s: &str| profiles.iter().filter(|p| p.contains(s)).count();
    assert!(
        with(" cm\n") > 0 && with(" ft ") > 0,
        "heights in cm and ft/in"
    );
    assert!(profiles.iter().any(|p| {
        p.lines()
            .any(|l| l.starts_with("height: ") && l.ends_with(" in") && !l.contains("ft"))
    }));
    assert!(with("name: \"Łucja Nguyễn-Øberg\"") == 1 && with("Søren Achterberg") == 1);
    assert!(with("Ana-Lucía Ferreira") == 1);
    assert_eq!(with("flags: [glucose-lowering-medication]"), 1);
    assert_eq!(with("withdrew: "), 4);
    assert!(with("body_fat_percent: ") >= 4 && with("age: ") > 0 && with("birth_date: ") > 24);
    for site in ["Kiln Row", "Harbour Depot", "North Office"] {
        // Every site is big enough for a group report with a minimum cell of 11.
        assert!(with(&format!("site: {site},")) >= 11, "{site}");
    }
    // About a third weigh in pounds.
    let lb = tree
        .iter()
        .filter(|(p, b)| p.ends_with("weights.csv") && String::from_utf8_lossy(b).contains(",lb,"))
        .count();
    assert!((8..=24).contains(&lb), "{lb} participants in lb");
    // Each profile parses as YAML with the contract's keys.
    for p in &profiles {
        let v: serde_yaml::Value = serde_yaml::from_str(p).unwrap();
        for key in ["id", "name", "sex", "height", "enrolled", "groups"] {
            assert!(v.get(key).is_some(), "{key} missing in {p}");
        }
    }
}

#[test]
fn withdrawn_participants_stop_recording() {
    let scenario = Scenario::steady_ground();
    let plans = sim::plan_cohort(48, 2026, true);
    let mut withdrawn = 0;
    for plan in &plans {
        let p = sim::simulate(plan, &scenario, 2026);
        let Some(w) = p.withdrew else { continue };
        withdrawn += 1;
        assert!(plan.defects.is_empty(), "defect hosts stay to the end");
        assert!(p.weights.iter().all(|r| r.date < w));
        assert!(p.intake.iter().all(|r| r.date < w));
        assert!(p.activity.iter().all(|r| r.date < w));
        assert!(p.sessions.iter().all(|r| r.date < w));
        assert_eq!(p.labs.len(), 2, "baseline labs only");
    }
    assert_eq!(withdrawn, 4);
}

/// Mean of the true weights on days `a..b`, kg.
fn mean(xs: &[f64]) -> f64 {
    xs.iter().sum::<f64>() / xs.len() as f64
}

#[test]
fn mifflin_st_jeor_matches_check_values() {
    // Regression values for our implementation of Mifflin et al. 1990 (Am J Clin Nutr 51:241),
    // computed from the published equations.
    use cohortpress_metric_api::Sex;
    assert!((sim::mifflin_st_jeor(Sex::Male, 80.0, 180.0, 40.0) - 1730.0).abs() < 0.01);
    assert!((sim::mifflin_st_jeor(Sex::Female, 65.0, 165.0, 35.0) - 1345.25).abs() < 0.01);
    assert!((sim::mifflin_st_jeor(Sex::Female, 100.0, 170.0, 50.0) - 1651.5).abs() < 0.01);
}

#[test]
fn simulated_courses_have_their_shapes() {
    let scenario = Scenario::steady_ground();
    let plans = sim::plan_cohort(200, 2026, false);
    let mut by_course: BTreeMap<&str, Vec<f64>> = BTreeMap::new();
    let mut plateau_like = 0;
    let mut drifters = 0;
    for plan in &plans {
        let p = sim::simulate(plan, &scenario, 2026);
        let tw = &p.true_weight;
        if tw.len() < 170 {
            continue;
        }
        let w0 = tw[0];
        let change = 100.0 * (tw[tw.len() - 1] - w0) / w0;
        let key = match plan.course {
            CourseKind::Drifter => "drifter",
            CourseKind::Adherer => "adherer",
            CourseKind::Regainer => "regainer",
            CourseKind::NonResponder => "non-responder",
        };
        by_course.entry(key).or_default().push(change);
        match plan.course {
            CourseKind::Drifter => {
                // Loss in months 1–2 against months 5–6: the later rate is much smaller.
                drifters += 1;
                let early = tw[0] - tw[60];
                let late = tw[tw.len() - 61] - tw[tw.len() - 1];
                if late < 0.35 * early {
                    plateau_like += 1;
                }
            }
            CourseKind::Adherer => {
                // Still losing at the end, but more slowly than at the start (expenditure falls
                // with weight).
                let early = tw[0] - tw[60];
                let late = tw[tw.len() - 61] - tw[tw.len() - 1];
                assert!(
                    late > 0.0 && late < early,
                    "{} early {early} late {late}",
                    plan.id
                );
            }
            CourseKind::Regainer => {
                let low = tw.iter().copied().fold(f64::INFINITY, f64::min);
                assert!(tw[tw.len() - 1] - low > 0.5, "{} regains", plan.id);
            }
            CourseKind::NonResponder => {
                assert!(change.abs() < 4.0, "{} {change}", plan.id);
            }
        }
    }
    let median = |k: &str| {
        let mut v = by_course[k].clone();
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    assert!(median("adherer") < -6.0, "adherers {}", median("adherer"));
    assert!(
        (-6.0..-1.5).contains(&median("drifter")),
        "drifters {}",
        median("drifter")
    );
    assert!(median("non-responder") > median("drifter"));
    // Most drifters plateau (the usual 3–4 month pattern).
    assert!(
        plateau_like * 10 >= drifters * 7,
        "{plateau_like} of {drifters}"
    );
}

#[test]
fn records_differ_from_the_truth_as_real_ones_do() {
    let scenario = Scenario::steady_ground();
    let plans = sim::plan_cohort(48, 2026, false);
    let mut ratios = Vec::new();
    let mut residuals = Vec::new();
    for plan in &plans {
        let p = sim::simulate(plan, &scenario, 2026);
        // Home weigh-ins scatter around the true weight by roughly 0.5–0.8 kg.
        for r in p.weights.iter().filter(|r| !r.clinic) {
            let t = (r.date - p.enrolled).num_days() as usize;
            residuals.push(r.kg - p.true_weight[t]);
        }
        // Logged energy is below what maintenance at the starting weight would need, after
        // the first weeks, for nearly everyone (deficit plus under-reporting).
        if !p.intake.is_empty() {
            let mut per_day: BTreeMap<NaiveDate, i64> = BTreeMap::new();
            for r in &p.intake {
                *per_day.entry(r.date).or_default() += r.kcal;
            }
            let h = p.height.cm();
            let rmr = sim::mifflin_st_jeor(plan.sex, p.true_weight[0], h, p.age as f64);
            let logged = mean(&per_day.values().map(|&k| k as f64).collect::<Vec<_>>());
            ratios.push(logged / rmr);
        }
        assert!(matches!(
            p.height,
            HeightWritten::Cm(_) | HeightWritten::FeetInches(..) | HeightWritten::Inches(_)
        ));
    }
    let sd = {
        let m = mean(&residuals);
        (residuals.iter().map(|r| (r - m).powi(2)).sum::<f64>() / residuals.len() as f64).sqrt()
    };
    assert!((0.5..1.0).contains(&sd), "scatter sd {sd}");
    // Reported intake / predicted BMR mostly well below 1.35 (Archer et al. 2013 PLoS One
    // 8:e76632 treat lower ratios as implausible for weight-stable people).
    let low = ratios.iter().filter(|&&r| r < 1.35).count();
    assert!(low * 4 >= ratios.len() * 3, "{low} of {}", ratios.len());
}

#[test]
fn glycaemic_ranges_are_spread_as_planned() {
    let plans = sim::plan_cohort(48, 2026, true);
    let count = |g| plans.iter().filter(|p| p.glycaemia == g).count();
    assert_eq!(count(Glycaemia::Diabetes), 2);
    assert_eq!(count(Glycaemia::Prediabetes), 8);
    assert_eq!(plans.iter().filter(|p| p.medication).count(), 1);
    assert!(
        plans
            .iter()
            .filter(|p| p.medication)
            .all(|p| p.glycaemia == Glycaemia::Diabetes)
    );
}

#[test]
fn refuses_a_folder_that_is_not_a_demo() {
    let dir = tempfile::tempdir().unwrap();
    fs::write(dir.path().join("notes.txt"), "mine").unwrap();
    let err = generate(dir.path(), &DemoOptions::default()).unwrap_err();
    assert_eq!(err.kind(), io::ErrorKind::AlreadyExists);
    assert!(err.to_string().contains("refusing to write"), "{err}");
    assert_eq!(
        fs::read_to_string(dir.path().join("notes.txt")).unwrap(),
        "mine"
    );
    assert!(!dir.path().join("program.yaml").exists());

    // A real program (a program.yaml that the generator did not write) is refused too.
    let real = tempfile::tempdir().unwrap();
    fs::write(real.path().join("program.yaml"), "format_version: 1\n").unwrap();
    fs::create_dir(real.path().join("participants")).unwrap();
    fs::write(real.path().join("participants/keep.txt"), "x").unwrap();
    assert!(generate(real.path(), &DemoOptions::default()).is_err());
    assert!(real.path().join("participants/keep.txt").exists());

    let err = generate(
        &dir.path().join("new"),
        &DemoOptions {
            participants: 0,
            ..DemoOptions::default()
        },
    );
    assert_eq!(err.unwrap_err().kind(), io::ErrorKind::InvalidInput);
    // A typo of a count: planned in memory (about 800 MB at 100 million) before any file.
    let err = generate(
        &dir.path().join("huge"),
        &DemoOptions {
            participants: MAX_DEMO_PARTICIPANTS + 1,
            ..DemoOptions::default()
        },
    )
    .unwrap_err();
    assert_eq!(err.kind(), io::ErrorKind::InvalidInput);
    assert_eq!(
        err.to_string(),
        "a demo program has at most 100,000 participants, found 100,001"
    );
    assert!(!dir.path().join("huge").exists());
}

#[test]
fn regenerating_over_a_previous_demo_replaces_its_participants() {
    let (dir, _) = generated(&DemoOptions::default());
    let root = demo_root(&dir);
    fs::write(root.join("README.md"), "kept").unwrap();
    let s = generate(
        &root,
        &DemoOptions {
            participants: 5,
            seed: 3,
            with_defects: false,
        },
    )
    .unwrap();
    assert_eq!(s.participants, 5);
    let folders: Vec<String> = fs::read_dir(root.join("participants"))
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    assert_eq!(folders.len(), 5, "stale folders removed: {folders:?}");
    assert_eq!(fs::read_to_string(root.join("README.md")).unwrap(), "kept");
}

/// A demo program someone started to use: its program.yaml is still the generated one, but a
/// participant folder was added and a weigh-in edited. Writing the demo again replaced
/// participants/ as a whole and deleted both without a word.
#[test]
fn regenerating_never_deletes_what_was_added_to_or_changed_in_the_participants() {
    let opts = DemoOptions {
        participants: 6,
        seed: 5,
        with_defects: true,
    };
    let (dir, _) = generated(&opts);
    let root = demo_root(&dir);
    let parts = root.join("participants");
    fs::create_dir(parts.join("LW-0147")).unwrap();
    fs::write(parts.join("LW-0147/weights.csv"), "date,weight,unit\n").unwrap();
    let weights = parts.join("SG-002/weights.csv");
    let mut edited = fs::read(&weights).unwrap();
    edited.extend_from_slice(b"2026-09-29,70.0,kg,clinic\n");
    fs::write(&weights, &edited).unwrap();
    let before = tree_hash(&root);

    let err = generate(&root, &opts).unwrap_err();
    assert_eq!(err.kind(), io::ErrorKind::AlreadyExists);
    let msg = err.to_string();
    assert!(
        msg.contains("(`participants/LW-0147`, `participants/SG-002/weights.csv`)"),
        "{msg}"
    );
    assert_eq!(tree_hash(&root), before, "nothing was changed");

    // A link where a participant's file was is not the generator's either (and a link
    // named participants/ is not replaced).
    fs::remove_dir_all(parts.join("LW-0147")).unwrap();
    fs::remove_file(&weights).unwrap();
    std::os::unix::fs::symlink("/etc/hostname", &weights).unwrap();
    let msg = generate(&root, &opts).unwrap_err().to_string();
    assert!(msg.contains("(`participants/SG-002/weights.csv`)"), "{msg}");

    // Files of the generator that were deleted, or cut short by a stopped run, lose nothing:
    // written again.
    fs::remove_file(&weights).unwrap();
    let intake = parts.join("SG-003/intake.csv");
    let cut = fs::read(&intake).unwrap();
    fs::write(&intake, &cut[..cut.len() / 2]).unwrap();
    fs::remove_dir_all(parts.join("SG-004")).unwrap();
    let s = generate(&root, &opts).unwrap();
    assert_eq!(s.participants, 6 + 2);
    let (fresh, _) = generated(&opts);
    assert_eq!(tree_hash(&root), tree_hash(&demo_root(&fresh)));
}

#[test]
fn committed_sample_matches_the_generator() {
    // If this fails after a deliberate change to the generator, regenerate the sample:
    //   cargo test --lib demo -- --ignored regenerate_sample
    let (dir, _) = generated(&DemoOptions::default());
    let fresh = read_tree(&demo_root(&dir));
    let committed = read_tree(&sample_dir());
    let fresh_paths: Vec<&String> = fresh.keys().collect();
    let committed_paths: Vec<&String> = committed.keys().collect();
    assert_eq!(
        fresh_paths, committed_paths,
        "sample-program/ has other files than the generator writes"
    );
    for (path, bytes) in &fresh {
        assert!(
            committed[path] == *bytes,
            "sample-program/{path} differs from the generator's output"
        );
    }
}

#[test]
fn a_larger_cohort_scales() {
    // 1 000 participants: ids widen past 999 only when needed, every folder is complete.
    let (dir, s) = generated(&DemoOptions {
        participants: 1000,
        seed: 11,
        with_defects: true,
    });
    assert_eq!(s.participants, 1000 + 2);
    let root = demo_root(&dir).join("participants");
    assert!(root.join("SG-999/profile.yaml").exists());
    assert!(root.join("SG-1000/profile.yaml").exists());
    assert!(
        root.join("SG-1001/weights.csv").exists() && !root.join("SG-1001/profile.yaml").exists()
    );
    // The showcase participants come after the folder without a profile.
    assert!(root.join("SG-1003/profile.yaml").exists() && !root.join("SG-1004").exists());
    assert!(s.files > 1000 * 4 && s.bytes > 1000 * 5_000, "{s:?}");
}

#[test]
fn check_reports_the_planted_defects_and_nothing_else() {
    // The sample is clean apart from the planted defects: the checker finds one problem per
    // defect, in the file the README names, and every participant but SG-049 stays usable.
    // The duplicated intake row of SG-029 is no longer a warning: without a time it is not
    // strong evidence of a duplicate, so both rows count, with a note.
    let report =
        crate::check::check_program(&sample_dir(), NaiveDate::from_ymd_opt(2026, 12, 2).unwrap());
    assert!(!report.program_invalid());
    assert_eq!(report.usable(), 50);
    let mut files: Vec<String> = report.all_diagnostics().map(|d| d.file.clone()).collect();
    files.sort();
    assert_eq!(
        files,
        [
            "participants/SG-023/weights.csv",
            "participants/SG-032/weights.csv",
            "participants/SG-033/weights.csv",
            "participants/SG-042/weights.csv",
            "participants/SG-043/activity.csv",
            "participants/SG-045/weights.csv",
            "participants/SG-049/profile.yaml",
        ]
    );
}

/// The generated program.yaml's own comment for the key on the line starting `prefix`: that
/// line's comment and the comment lines right above it.
fn comment_of(text: &str, prefix: &str) -> String {
    let lines: Vec<&str> = text.lines().collect();
    let at: Vec<usize> = (0..lines.len())
        .filter(|&i| lines[i].starts_with(prefix))
        .collect();
    assert_eq!(at.len(), 1, "`{prefix}` is not on one line of:\n{text}");
    let mut parts = Vec::new();
    let mut i = at[0];
    while i > 0 && lines[i - 1].trim_start().starts_with('#') {
        i -= 1;
        parts.insert(0, lines[i].trim_start().trim_start_matches('#').trim());
    }
    if let Some((_, own)) = lines[at[0]].split_once(" # ") {
        parts.push(own.trim());
    }
    parts.join(" ")
}

/// The values a comment names in backticks, keys (`command:`) aside.
fn backticked(s: &str) -> Vec<String> {
    s.split('`')
        .skip(1)
        .step_by(2)
        .filter(|v| !v.ends_with(':'))
        .map(str::to_string)
        .collect()
}

/// `text` with the value on the line starting `prefix` replaced by `value` (its comment gone).
fn with_value(text: &str, prefix: &str, value: &str) -> String {
    text.lines()
        .map(|l| {
            if l.starts_with(prefix) {
                format!("{prefix} {value}")
            } else {
                l.to_string()
            }
        })
        .collect::<Vec<_>>()
        .join("\n")
}

/// The numbers written after `word` in `s` (`from -50 to 50` → [-50, 50]).
fn numbers_after(s: &str, word: &str) -> Vec<f64> {
    let rest = &s[s
        .find(word)
        .unwrap_or_else(|| panic!("no `{word}` in: {s}"))..];
    rest.split(|c: char| c.is_whitespace() || c == ';' || c == ',')
        .filter_map(|w| w.parse::<f64>().ok())
        .collect()
}

/// The demo's program.yaml is where people learn the keys: its comment on `units` named
/// metric units and conversions but not `us_customary`, the other value (tryout25). Every value
/// or limit a comment names is read back from the comment and put to the program parser: each
/// value named is accepted, a value just past each limit is refused, and the enumerations name
/// exactly the values the parser lists when it refuses one it does not know.
#[test]
fn every_comment_of_the_generated_program_yaml_names_what_the_parser_accepts() {
    let mut buf = Vec::new();
    write::program_yaml(
        &mut buf,
        &Scenario::steady_ground(),
        &DemoOptions::default(),
    );
    let text = String::from_utf8(buf).unwrap();
    let root = tempfile::tempdir().unwrap();
    let parse = |t: &str| {
        crate::program::load::parse_program(root.path(), t)
            .map(|_| ())
            .map_err(|d| {
                d.iter()
                    .map(|d| d.to_string())
                    .collect::<Vec<_>>()
                    .join("\n")
            })
    };
    parse(&text).unwrap();
    let accepted = |prefix: &str, value: &str| {
        if let Err(e) = parse(&with_value(&text, prefix, value)) {
            panic!("`{prefix} {value}` named by its comment is refused: {e}");
        }
    };
    let refused = |prefix: &str, value: &str| {
        parse(&with_value(&text, prefix, value))
            .expect_err(&format!("`{prefix} {value}` is accepted"))
    };

    // Enumerations: the values named are exactly those the parser knows.
    for (prefix, list) in [
        ("units:", false),
        ("  period:", false),
        ("  formats:", true),
    ] {
        let named = backticked(&comment_of(&text, prefix));
        assert!(named.len() >= 2, "`{prefix}`: {named:?}");
        let put = |v: &str| {
            if list {
                format!("[{v}]")
            } else {
                v.to_string()
            }
        };
        for v in &named {
            accepted(prefix, &put(v));
        }
        let e = refused(prefix, &put("nonesuch"));
        let mut known: Vec<String> = backticked(&e)
            .into_iter()
            .filter(|v| v != "nonesuch")
            .collect();
        known.sort();
        known.dedup();
        let mut named = named;
        named.sort();
        assert_eq!(named, known, "`{prefix}` comment against the parser: {e}");
    }
    assert!(comment_of(&text, "units:").contains("`us_customary`"));

    // Ranges: both ends accepted, one past each refused.
    for key in [
        "weight_change_percent",
        "activity_minutes_per_week",
        "weigh_ins_per_week",
        "food_log_days_per_week",
    ] {
        let prefix = format!("  {key}:");
        let ends = numbers_after(&comment_of(&text, &prefix), "from ");
        let (lo, hi) = (ends[0], ends[1]);
        accepted(&prefix, &lo.to_string());
        accepted(&prefix, &hi.to_string());
        for past in [lo - 0.5, hi + 0.5] {
            let e = refused(&prefix, &past.to_string());
            assert!(e.contains(&format!("targets.{key}")), "{e}");
        }
    }
    let least = numbers_after(&comment_of(&text, "  min_cell_size:"), "at least ")[0];
    accepted("  min_cell_size:", &least.to_string());
    assert!(refused("  min_cell_size:", &(least - 1.0).to_string()).contains("min_cell_size"));

    // The program id: its characters and its length.
    let id = comment_of(&text, "  id: steady");
    assert!(id.contains("ASCII letters, digits, `-` and `_`"), "{id}");
    let most = numbers_after(&id, "at most ")[0] as usize;
    accepted("  id:", "Ab-9_x");
    accepted("  id:", &"a".repeat(most));
    for bad in ["a".repeat(most + 1), "a.b".into(), "é".into(), "a b".into()] {
        assert!(refused("  id:", &format!("\"{bad}\"")).contains("program.id"));
    }

    // The program's length.
    let days = numbers_after(&comment_of(&text, "  end:"), "at most ")[0] as i64;
    let start: NaiveDate = text
        .lines()
        .find_map(|l| l.strip_prefix("  start: "))
        .unwrap()
        .trim()
        .parse()
        .unwrap();
    accepted(
        "  end:",
        &(start + chrono::Duration::days(days)).to_string(),
    );
    assert!(
        refused(
            "  end:",
            &(start + chrono::Duration::days(days + 1)).to_string()
        )
        .contains("program.end")
    );
    accepted("  end:", &(start + chrono::Duration::days(1)).to_string());
    assert!(refused("  end:", &start.to_string()).contains("program.end"));

    // The built-in modules the comment names are the registry's.
    let mut named = backticked(&comment_of(&text, "modules:"));
    named.sort();
    let mut builtin: Vec<String> = crate::modules::registry::builtin_modules()
        .iter()
        .map(|m| m.spec().id)
        .collect();
    builtin.sort();
    assert_eq!(named, builtin);
}

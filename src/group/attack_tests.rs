//! Subtraction attacks on published group reports, written as attackers that read the
//! serialised reports (what a sponsor holds) and know, as the worst case, who is in every site
//! and who lacks a recent weigh-in. Each attacker must recover nothing: no combination of
//! published sums that involves fewer than the minimum cell size of people.
//!
//! The attacker is independent of the audit code: it lists the published sums (a mean printed
//! with its n is a sum) as rows over per-person unknowns, and for every group T of
//! `min − 1` people (enough: a group that leaks stays leaking when people are added) tests by
//! floating-point elimination whether some non-zero combination of the rows involves only
//! unknowns of T. Each test also runs the attacker on the unprotected figures, to show that
//! the attack it stands for is real.

use std::collections::{BTreeMap, BTreeSet};

use serde_json::Value;

use super::summary::build;
use super::*;

/// One participant in the attacker's world: a name (never in any report) and their row.
#[derive(Clone)]
struct Person {
    name: String,
    row: ParticipantSummary,
}

fn person(name: &str, site: &str, change: f64, outcome: bool, locf: f64) -> Person {
    let b = 100.0;
    Person {
        name: name.into(),
        row: ParticipantSummary {
            groups: BTreeMap::from([("site".to_string(), site.to_string())]),
            enrolled: true,
            started: true,
            baseline_kg: Some(b),
            outcome_kg: outcome.then_some(b * (1.0 + change / 100.0)),
            last_observed_kg: Some(b * (1.0 + locf / 100.0)),
            pseudonym: Some(pseudonym(name)),
            ..Default::default()
        },
    }
}

/// One release as the attacker holds it: the serialised report and the true rows (the
/// attacker's worst-case side knowledge of memberships; values are the unknowns).
struct Release {
    report: Value,
    people: Vec<Person>,
}

/// An unknown of the attacker: (person name, what, value bits). The same person's same value
/// in two releases is the same unknown.
type Unknown = (String, &'static str, u64);

fn pct(r: &ParticipantSummary, w: f64) -> f64 {
    let b = r.baseline_kg.unwrap();
    100.0 * (w - b) / b
}

/// Every published sum of a release as its set of unknowns.
fn published_sums(rel: &Release) -> Vec<Vec<Unknown>> {
    let mut sections: Vec<(Vec<&Person>, &Value)> = Vec::new();
    let started: Vec<&Person> = rel.people.iter().filter(|p| p.row.started).collect();
    if let Some(st) = rel.report["program"].get("stats").filter(|s| !s.is_null()) {
        sections.push((started.clone(), st));
    }
    for split in rel.report["splits"].as_array().unwrap() {
        for sec in split["sections"].as_array().unwrap() {
            let Some(st) = sec.get("stats").filter(|s| !s.is_null()) else {
                continue;
            };
            let labels: Vec<String> = if sec["kind"] == "combined" {
                sec["members"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|m| m.as_str().unwrap().to_string())
                    .collect()
            } else {
                vec![sec["label"].as_str().unwrap().to_string()]
            };
            let members = started
                .iter()
                .copied()
                .filter(|p| labels.contains(&p.row.groups["site"]))
                .collect();
            sections.push((members, st));
        }
    }
    let shown = |v: &Value| v.get("value").is_some();
    let mut sums = Vec::new();
    for (members, st) in sections {
        let change = |p: &Person| -> Option<Unknown> {
            let w = p.row.outcome_kg?;
            Some((p.name.clone(), "change", pct(&p.row, w).to_bits()))
        };
        let carried = |p: &Person| -> Unknown {
            let w = p.row.outcome_kg.or(p.row.last_observed_kg).unwrap();
            (p.name.clone(), "change", pct(&p.row, w).to_bits())
        };
        let wc = &st["weight_change"];
        for line in ["bocf", "completers"] {
            if shown(&wc[line]["n"]) && shown(&wc[line]["percent"]["mean"]) {
                sums.push(members.iter().filter_map(|p| change(p)).collect());
            }
        }
        if shown(&wc["locf"]["n"]) && shown(&wc["locf"]["percent"]["mean"]) {
            sums.push(members.iter().map(|p| carried(p)).collect());
        }
        for wp in st["trajectory"].as_array().unwrap() {
            // A week's n may be printed as a band only: the attacker knows who is in it anyway.
            if shown(&wp["mean_percent"]) {
                let w = wp["week"].as_u64().unwrap() as u32;
                sums.push(
                    members
                        .iter()
                        .filter_map(|p| {
                            let v = p
                                .row
                                .weekly_change_percent
                                .iter()
                                .rev()
                                .find(|(ww, _)| *ww == w)?
                                .1;
                            Some((p.name.clone(), "week", v.to_bits() ^ u64::from(w)))
                        })
                        .collect(),
                );
            }
        }
    }
    sums
}

fn rank(rows: &[Vec<f64>]) -> usize {
    let mut m: Vec<Vec<f64>> = rows.to_vec();
    let ncols = m.first().map_or(0, |r| r.len());
    let mut r = 0;
    for c in 0..ncols {
        let Some(p) = (r..m.len()).find(|&i| m[i][c].abs() > 1e-9) else {
            continue;
        };
        m.swap(r, p);
        let piv = m[r].clone();
        for (i, row) in m.iter_mut().enumerate() {
            if i != r && row[c].abs() > 1e-9 {
                let f = row[c] / piv[c];
                for (v, pv) in row.iter_mut().zip(&piv) {
                    *v -= f * pv;
                }
            }
        }
        r += 1;
    }
    r
}

fn subsets(n: usize, k: usize, f: &mut dyn FnMut(&[usize])) {
    fn go(n: usize, k: usize, start: usize, cur: &mut Vec<usize>, f: &mut dyn FnMut(&[usize])) {
        if cur.len() == k {
            f(cur);
            return;
        }
        for i in start..n {
            cur.push(i);
            go(n, k, i + 1, cur, f);
            cur.pop();
        }
    }
    go(n, k, 0, &mut Vec::new(), f);
}

/// The groups of fewer than `min` people whose total (or any combination of their values)
/// the attacker can derive from all releases together. Empty = the attack recovers nothing.
fn attack(releases: &[Release], min: usize) -> Vec<Vec<String>> {
    let sums: Vec<Vec<Unknown>> = releases.iter().flat_map(published_sums).collect();
    let mut unknowns: BTreeMap<Unknown, usize> = BTreeMap::new();
    for s in &sums {
        for u in s {
            let n = unknowns.len();
            unknowns.entry(u.clone()).or_insert(n);
        }
    }
    let rows: Vec<Vec<f64>> = sums
        .iter()
        .map(|s| {
            let mut r = vec![0.0; unknowns.len()];
            for u in s {
                r[unknowns[u]] = 1.0;
            }
            r
        })
        .collect();
    let full = rank(&rows);
    let mut names: Vec<String> = unknowns.keys().map(|u| u.0.clone()).collect();
    names.sort();
    names.dedup();
    let k = (min - 1).min(names.len());
    let mut found = Vec::new();
    subsets(names.len(), k, &mut |t| {
        let group: Vec<&String> = t.iter().map(|&i| &names[i]).collect();
        let outside: Vec<usize> = unknowns
            .iter()
            .filter(|(u, _)| !group.contains(&&u.0))
            .map(|(_, &c)| c)
            .collect();
        let reduced: Vec<Vec<f64>> = rows
            .iter()
            .map(|r| outside.iter().map(|&c| r[c]).collect())
            .collect();
        if rank(&reduced) < full {
            found.push(group.into_iter().cloned().collect());
        }
    });
    found
}

fn opts(min: u32) -> GroupOptions {
    GroupOptions {
        min_cell_size: min,
        group_by: vec!["site".into()],
        confidence: 0.95,
    }
}

fn secret() -> History {
    History {
        secret: Some([7; 32]),
        ..Default::default()
    }
}

fn rows(people: &[Person]) -> Vec<ParticipantSummary> {
    people.iter().map(|p| p.row.clone()).collect()
}

/// Releases in order, each audited against the ledger of the earlier ones.
fn publish_in_order(months: &[Vec<Person>], min: u32) -> Vec<Release> {
    let mut history = secret();
    let mut out = Vec::new();
    for people in months {
        let (report, published) = summarize_release(&rows(people), &opts(min), &history);
        history.add(published);
        out.push(Release {
            report: serde_json::to_value(report).unwrap(),
            people: people.clone(),
        });
    }
    out
}

/// The same releases without the audit's protection (figures as computed): the attack works.
fn unprotected(months: &[Vec<Person>], min: u32) -> Vec<Release> {
    months
        .iter()
        .map(|people| Release {
            report: serde_json::to_value(build(&rows(people), &opts(0), true, &secret()).0)
                .unwrap(),
            people: people.clone(),
        })
        .map(|mut r| {
            r.report["min_cell_size"] = min.into();
            r
        })
        .collect()
}

fn cohort(n: usize, sites: &[&str], missing: &[usize], seed: u64) -> Vec<Person> {
    let mut x = seed;
    let mut next = || {
        x = x
            .wrapping_mul(6364136223846793005)
            .wrapping_add(1442695040888963407);
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|i| {
            let change = -10.0 + 12.0 * next();
            person(
                &format!("P{i:02}"),
                sites[i % sites.len()],
                change,
                !missing.contains(&i),
                change / 2.0,
            )
        })
        .collect()
}

#[test]
fn itt_variants_reveal_nothing_about_the_people_without_a_recent_weigh_in() {
    // 30 started, 3 without a recent weigh-in, minimum 5: LOCF − BOCF = their LOCF total.
    let month = cohort(30, &["Kiln Row"], &[2, 7, 11], 1);
    let min = 5;
    assert!(
        !attack(
            &unprotected(std::slice::from_ref(&month), min),
            min as usize
        )
        .is_empty(),
        "the unprotected report leaks (the attack is real)"
    );
    let rel = publish_in_order(&[month], min);
    assert_eq!(attack(&rel, min as usize), Vec::<Vec<String>>::new());
    // The primary line still tells the sponsor how much was lost.
    let bocf = &rel[0].report["program"]["stats"]["weight_change"]["bocf"]["percent"]["mean"];
    assert!(
        bocf.get("value").is_some(),
        "{bocf} {} {}",
        rel[0].report["program"]["stats"]["enrolment"],
        rel[0].report["audit"]
    );
}

#[test]
fn completers_and_itt_and_splits_against_the_whole_reveal_nothing() {
    // Two sites; in one, only a few people lack a recent weigh-in, so the site's completers
    // line and ITT line, and the whole program minus the other site, are all candidates.
    let month = cohort(18, &["Kiln Row", "Harbour Yard"], &[1, 3, 4], 2);
    let min = 5;
    assert!(
        !attack(
            &unprotected(std::slice::from_ref(&month), min),
            min as usize
        )
        .is_empty()
    );
    let rel = publish_in_order(&[month], min);
    assert_eq!(attack(&rel, min as usize), Vec::<Vec<String>>::new());
}

#[test]
fn reissue_after_one_file_was_fixed_reveals_nothing() {
    // First issue: P05 has no recent weigh-in; the re-issue of the same month has it.
    let first = cohort(16, &["Kiln Row"], &[5, 9, 12, 13, 14, 15], 3);
    let mut fixed = first.clone();
    let b = fixed[5].row.baseline_kg.unwrap();
    fixed[5].row.outcome_kg = Some(b * 0.93);
    let min = 5;
    let months = [first, fixed];
    assert!(!attack(&unprotected(&months, min), min as usize).is_empty());
    let rel = publish_in_order(&months, min);
    assert_eq!(attack(&rel, min as usize), Vec::<Vec<String>>::new());
    // The re-issue still shows the primary line or says why not, per the audit notes.
    let audit = rel[1].report["audit"].as_array().unwrap();
    let bocf = &rel[1].report["program"]["stats"]["weight_change"]["bocf"]["percent"]["mean"];
    assert!(bocf.get("value").is_some() || !audit.is_empty());
}

#[test]
fn one_person_joining_or_leaving_between_months_reveals_nothing() {
    let min = 5;
    let mut month1 = cohort(14, &["Kiln Row"], &[], 4);
    for p in &mut month1 {
        p.row.weekly_change_percent = vec![(0, -1.0 - p.name.len() as f64 / 10.0), (1, -2.5)];
    }
    // Joining: the same people with the same figures, plus one newcomer.
    let mut joined = month1.clone();
    let mut newcomer = person("P99", "Kiln Row", -6.0, true, -3.0);
    newcomer.row.weekly_change_percent = vec![(0, -0.7), (1, -1.9)];
    joined.push(newcomer);
    let months = [month1.clone(), joined];
    assert!(!attack(&unprotected(&months, min), min as usize).is_empty());
    assert_eq!(
        attack(&publish_in_order(&months, min), min as usize),
        Vec::<Vec<String>>::new()
    );
    // Leaving: one person gone the next month, everyone else unchanged.
    let left: Vec<Person> = month1[1..].to_vec();
    let months = [month1, left];
    assert!(!attack(&unprotected(&months, min), min as usize).is_empty());
    assert_eq!(
        attack(&publish_in_order(&months, min), min as usize),
        Vec::<Vec<String>>::new()
    );
}

#[test]
fn random_small_programs_leak_no_small_total() {
    // Bounded property test: 24 generated programs of 10–17 people in two or three sites,
    // random missing outcomes and a few weeks of trajectory; the brute-force attacker over
    // every group of min − 1 people must find nothing.
    let mut leaky_unprotected = 0;
    for seed in 0..24u64 {
        let mut x = seed.wrapping_add(11);
        let mut next = || {
            x = x
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (x >> 11) as f64 / (1u64 << 53) as f64
        };
        let n = 10 + (next() * 8.0) as usize;
        let sites: &[&str] = if next() < 0.5 {
            &["Kiln Row", "Harbour Yard"]
        } else {
            &["Kiln Row", "Harbour Yard", "Mill Street"]
        };
        let missing: Vec<usize> = (0..n).filter(|_| next() < 0.25).collect();
        let mut month = cohort(n, sites, &missing, seed);
        for p in &mut month {
            let weeks = (next() * 3.0) as u32;
            p.row.weekly_change_percent = (0..weeks).map(|w| (w, -next() * 3.0)).collect();
        }
        let min = 4 + (seed % 2) as u32;
        if !attack(
            &unprotected(std::slice::from_ref(&month), min),
            min as usize,
        )
        .is_empty()
        {
            leaky_unprotected += 1;
        }
        let rel = publish_in_order(&[month], min);
        assert_eq!(
            attack(&rel, min as usize),
            Vec::<Vec<String>>::new(),
            "seed {seed}"
        );
    }
    assert!(
        leaky_unprotected > 12,
        "the generator makes attackable programs"
    );
}

#[test]
fn ranges_contain_the_truth_and_never_pin_a_small_count() {
    for seed in 0..6u64 {
        let month = cohort(
            40 + seed as usize,
            &["Kiln Row", "Harbour Yard", "Mill Street"],
            &[3, 8, 9, 20, 31],
            seed,
        );
        let r = summarize_release(&rows(&month), &opts(11), &secret()).0;
        let truth = build(&rows(&month), &opts(0), false, &secret()).0;
        let (s, t) = (r.program.stats.unwrap(), truth.program.stats.unwrap());
        let pairs = [
            (s.enrolment.active, t.enrolment.active),
            (s.enrolment.withdrawn, t.enrolment.withdrawn),
            (s.enrolment.with_outcome, t.enrolment.with_outcome),
            (s.enrolment.without_outcome, t.enrolment.without_outcome),
        ];
        for (shown, true_value) in pairs {
            let v = *true_value.value().unwrap();
            match shown {
                Shown::Value(x) => assert_eq!(x, v),
                Shown::Range { lo, hi } => {
                    assert!(lo <= v && v <= hi, "{lo}–{hi} misses {v}");
                    assert!(hi >= lo + 2, "{lo}–{hi} pins {v}");
                }
                other => panic!("a count of the whole program is not shown at all: {other:?}"),
            }
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Counts. The attacker reads every count the reports print (exact or as a range), knows who
// each one counts (worst case), and works out by exhaustive search over whole numbers what
// each membership pattern's size can be.

/// A printed count as the attacker reads it: `(lo, hi)`, or `None` when nothing is printed.
fn read_count(v: &Value) -> Option<(u64, u64)> {
    if let Some(x) = v.get("value").and_then(Value::as_u64) {
        return Some((x, x));
    }
    match (
        v.get("at_least").and_then(Value::as_u64),
        v.get("at_most").and_then(Value::as_u64),
    ) {
        (Some(lo), Some(hi)) => Some((lo, hi)),
        _ => None,
    }
}

/// The groups of people of a count attack: each a list of names (the membership patterns the
/// attacker knows), with their true sizes.
type Constraint = (Vec<usize>, (u64, u64));

/// Every assignment of whole sizes to the `regions` (0 … `cap` each) meeting the constraints
/// (each: the regions it covers, printed bounds); for each region, the set of sizes seen.
fn possible_sizes(regions: usize, cap: u64, cons: &[Constraint]) -> Vec<Vec<u64>> {
    let mut seen = vec![std::collections::BTreeSet::new(); regions];
    let mut x = vec![0u64; regions];
    fn go(
        i: usize,
        x: &mut Vec<u64>,
        cap: u64,
        cons: &[Constraint],
        seen: &mut [std::collections::BTreeSet<u64>],
    ) {
        if i == x.len() {
            let ok = cons.iter().all(|(rs, (lo, hi))| {
                let s: u64 = rs.iter().map(|&r| x[r]).sum();
                *lo <= s && s <= *hi
            });
            if ok {
                for (r, v) in x.iter().enumerate() {
                    seen[r].insert(*v);
                }
            }
            return;
        }
        for v in 0..=cap {
            x[i] = v;
            go(i + 1, x, cap, cons, seen);
        }
    }
    go(0, &mut x, cap, cons, &mut seen);
    seen.into_iter().map(|s| s.into_iter().collect()).collect()
}

/// The count attack across releases on "enrolled", "active" and "started" of every section:
/// the names of every membership pattern of 1 … min − 1 people that the printed figures pin
/// to fewer than three possible sizes.
fn count_attack(releases: &[Release], min: u64) -> Vec<Vec<String>> {
    // Printed counts with the names they count.
    let mut printed: Vec<(std::collections::BTreeSet<String>, (u64, u64))> = Vec::new();
    for rel in releases {
        let mut sections: Vec<(Vec<&Person>, &Value)> =
            vec![(rel.people.iter().collect(), &rel.report["program"]["stats"])];
        for split in rel.report["splits"].as_array().unwrap() {
            for sec in split["sections"].as_array().unwrap() {
                let label = sec["label"].as_str().unwrap();
                let who = rel
                    .people
                    .iter()
                    .filter(|p| p.row.groups.get("site").map(String::as_str) == Some(label))
                    .collect();
                sections.push((who, &sec["stats"]));
            }
        }
        for (who, st) in sections {
            if st.is_null() {
                continue;
            }
            let e = &st["enrolment"];
            #[allow(clippy::type_complexity, reason = "a local table of three predicates")]
            let sets: [(&Value, Box<dyn Fn(&Person) -> bool>); 3] = [
                (&e["enrolled"], Box::new(|_| true)),
                (&e["active"], Box::new(|p: &Person| !p.row.withdrawn)),
                (&e["started"], Box::new(|p: &Person| p.row.started)),
            ];
            for (v, member) in sets {
                if let Some(b) = read_count(v) {
                    let names = who
                        .iter()
                        .filter(|p| member(p))
                        .map(|p| p.name.clone())
                        .collect();
                    printed.push((names, b));
                }
            }
        }
    }
    // Membership patterns.
    let everyone: std::collections::BTreeSet<&String> =
        printed.iter().flat_map(|(s, _)| s.iter()).collect();
    let mut patterns: BTreeMap<Vec<bool>, Vec<String>> = BTreeMap::new();
    for name in everyone {
        let pat = printed.iter().map(|(s, _)| s.contains(name)).collect();
        patterns.entry(pat).or_default().push(name.clone());
    }
    let regions: Vec<(Vec<bool>, Vec<String>)> = patterns.into_iter().collect();
    assert!(
        regions.len() <= 4,
        "the exhaustive attacker is for small pictures"
    );
    let cons: Vec<Constraint> = printed
        .iter()
        .enumerate()
        .map(|(j, (_, b))| {
            let rs = (0..regions.len()).filter(|&r| regions[r].0[j]).collect();
            (rs, *b)
        })
        .collect();
    let cap = regions.iter().map(|r| r.1.len() as u64).max().unwrap_or(0) + 3;
    let sizes = possible_sizes(regions.len(), cap, &cons);
    regions
        .iter()
        .zip(sizes)
        .filter(|((_, names), s)| {
            let n = names.len() as u64;
            n < min && s.len() < 3 && s.contains(&n)
        })
        .map(|((_, names), _)| names.clone())
        .collect()
}

/// Groups for the three-release attack: A (3 people), B and C (20 each), one site.
fn unions() -> [Vec<Person>; 3] {
    let group = |prefix: &str, n: usize| -> Vec<Person> {
        (0..n)
            .map(|i| person(&format!("{prefix}{i:02}"), "Kiln Row", -6.0, true, -3.0))
            .collect()
    };
    let (a, b, c) = (group("A", 3), group("B", 20), group("C", 20));
    let join = |x: &[Person], y: &[Person]| [x, y].concat();
    [join(&a, &b), join(&b, &c), join(&a, &c)]
}

#[test]
fn three_releases_whose_pairs_hide_a_small_group_do_not_give_it_away_together() {
    // Issued in turn: A∪B (23), B∪C (40), A∪C (23). No two of them isolate fewer than 11
    // people (their differences are 23 or 40), but the three give A = (23 + 40 + 23)/2 − 40.
    let min = 11;
    let months = unions();
    let open = unprotected(&months, min);
    for pair in [[0, 1], [0, 2], [1, 2]] {
        let two = [&open[pair[0]], &open[pair[1]]].map(|r| Release {
            report: r.report.clone(),
            people: r.people.clone(),
        });
        assert_eq!(
            count_attack(&two, u64::from(min)),
            Vec::<Vec<String>>::new()
        );
    }
    assert_eq!(
        count_attack(&open, u64::from(min)),
        vec![vec!["A00".to_string(), "A01".into(), "A02".into()]],
        "the three unprotected releases give A (the attack is real)"
    );
    let rel = publish_in_order(&months, min);
    assert_eq!(
        count_attack(&rel, u64::from(min)),
        Vec::<Vec<String>>::new()
    );
    // The first two releases are untouched by the third; the third says why it holds back.
    for r in &rel[..2] {
        assert!(r.report["program"]["stats"]["enrolment"]["enrolled"]["value"].is_u64());
    }
    let audit = rel[2].report["audit"].as_array().unwrap();
    assert!(
        audit
            .iter()
            .any(|n| n["rule"].as_str().unwrap().contains("earlier reports")),
        "{audit:?}"
    );
}

#[test]
fn counts_of_people_with_data_do_not_give_the_few_without_by_subtraction() {
    // 30 people, 3 of them without activity data and 2 without a plateau verdict: "enrolled"
    // minus "with activity data" would be 3, and "enrolled" minus "with a verdict" 2.
    let min = 11u64;
    let mut month = cohort(30, &["Kiln Row"], &[], 9);
    for (i, p) in month.iter_mut().enumerate() {
        p.row.activity_minutes_per_week = (i >= 3).then_some(120.0 + i as f64);
        p.row.weigh_ins_per_week = Some(3.0);
        p.row.in_plateau = (i >= 2).then_some(i % 2 == 0);
    }
    // What the attacker subtracts, per section: enrolled − with activity data, enrolled −
    // with a plateau verdict; true sizes 3 and 2.
    let derived = |report: &Value| -> Vec<(&'static str, u64, u64)> {
        let mut out = Vec::new();
        let mut sections = vec![&report["program"]["stats"]];
        for split in report["splits"].as_array().unwrap() {
            for sec in split["sections"].as_array().unwrap() {
                sections.push(&sec["stats"]);
            }
        }
        for st in sections.into_iter().filter(|s| !s.is_null()) {
            let Some((elo, ehi)) = read_count(&st["enrolment"]["enrolled"]) else {
                continue;
            };
            for (what, v) in [
                (
                    "activity",
                    &st["adherence"]["activity_minutes_per_week"]["n"],
                ),
                ("verdict", &st["plateau"]["with_verdict"]),
            ] {
                if let Some((lo, hi)) = read_count(v) {
                    out.push((what, elo.saturating_sub(hi), ehi.saturating_sub(lo)));
                }
            }
        }
        out
    };
    let leaks = |report: &Value| {
        derived(report)
            .into_iter()
            .filter(|&(_, lo, hi)| hi < lo + 2 && lo < min)
            .collect::<Vec<_>>()
    };
    let open = unprotected(std::slice::from_ref(&month), min as u32);
    assert_eq!(
        leaks(&open[0].report),
        vec![
            ("activity", 3, 3),
            ("verdict", 2, 2),
            ("activity", 3, 3),
            ("verdict", 2, 2)
        ],
        "unprotected, the program and its one site give both groups"
    );
    let rel = publish_in_order(&[month], min as u32);
    assert_eq!(leaks(&rel[0].report), Vec::new());
    // The program's enrolled count itself stays printed.
    assert_eq!(
        rel[0].report["program"]["stats"]["enrolment"]["enrolled"]["value"],
        30
    );
}

/// What a reader knows of a week's n in one section: the printed value or band, else, from the
/// printed rule, at least `min` when the week's mean is shown, else 0 … the number started.
fn week_bounds(stats: &Value, week: u64, min: u64) -> (u64, u64) {
    let started = stats["enrolment"]["started"]["value"]
        .as_u64()
        .unwrap_or(1 << 20);
    let w = stats["trajectory"]
        .as_array()
        .unwrap()
        .iter()
        .find(|w| w["week"].as_u64() == Some(week))
        .unwrap();
    if let Some(b) = read_count(&w["n"]) {
        return b;
    }
    if w["mean_percent"].get("value").is_some() {
        (min, started)
    } else {
        (0, started)
    }
}

/// A site whose people all enrolled a few weeks before the period's end has nobody in the
/// later weeks, and a reader who knows when the site began knows that. The program's later
/// weeks then count exactly the other site's people, but their band was counted down from the
/// program's number started and the site's from the site's: two bands of width min, offset by
/// the late site's 21 people, crossed at one value. Program "22–32" and Kiln Row "12–22" gave
/// n = 22 of Kiln Row's 23: the one person there who stopped weighing in. The attacker
/// intersects every section's week band with the program = Σ sites relation (interval
/// propagation, exact for one sum) and must narrow no shortfall of 1 … min − 1 to fewer than
/// three values.
#[test]
fn week_bands_of_sections_counting_the_same_people_do_not_pin_who_stopped() {
    let min = 11;
    let mut people = Vec::new();
    for i in 0..44 {
        let (site, last_week) = if i < 23 {
            ("Kiln Row", if i == 0 { 3 } else { 12 })
        } else {
            ("Harbour Yard", 3)
        };
        let mut p = person(&format!("P{i:02}"), site, -3.0 - (i % 7) as f64, true, -2.0);
        p.row.weekly_change_percent = (0..last_week)
            .map(|w| (w, -0.3 * f64::from(w) - 0.01 * i as f64))
            .collect();
        people.push(p);
    }
    let check = |report: &Value| -> Vec<String> {
        let program = &report["program"]["stats"];
        let sites: Vec<&Value> = report["splits"][0]["sections"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| &s["stats"])
            .collect();
        let truth = |site: &str, week: u64| {
            people
                .iter()
                .filter(|p| site.is_empty() || p.row.groups["site"] == site)
                .filter(|p| {
                    p.row
                        .weekly_change_percent
                        .iter()
                        .any(|&(w, _)| u64::from(w) == week)
                })
                .count() as u64
        };
        let labels: Vec<String> = report["splits"][0]["sections"]
            .as_array()
            .unwrap()
            .iter()
            .map(|s| s["label"].as_str().unwrap().to_string())
            .collect();
        let mut found = Vec::new();
        for week in 0..12u64 {
            let mut p = week_bounds(program, week, min);
            let mut s: Vec<(u64, u64)> = sites
                .iter()
                .zip(&labels)
                .map(|(st, l)| {
                    // The attacker knows which sites have nobody that far in.
                    if truth(l, week) == 0 {
                        (0, 0)
                    } else {
                        week_bounds(st, week, min)
                    }
                })
                .collect();
            for _ in 0..10 {
                let lo_sum: u64 = s.iter().map(|b| b.0).sum();
                let hi_sum: u64 = s.iter().map(|b| b.1).sum();
                p = (p.0.max(lo_sum), p.1.min(hi_sum));
                for b in s.iter_mut() {
                    let others = (lo_sum - b.0, hi_sum - b.1);
                    *b = (
                        b.0.max(p.0.saturating_sub(others.1)),
                        b.1.min(p.1.saturating_sub(others.0)),
                    );
                }
            }
            let mut all = vec![(String::new(), program, p)];
            all.extend(
                labels
                    .iter()
                    .cloned()
                    .zip(sites.iter().copied())
                    .zip(s)
                    .map(|((l, st), b)| (l, st, b)),
            );
            for (label, st, (lo, hi)) in all {
                let Some(started) = st["enrolment"]["started"]["value"].as_u64() else {
                    continue;
                };
                let short = started - truth(&label, week);
                if (1..min).contains(&short) && hi.saturating_sub(lo) < 2 {
                    found.push(format!(
                        "{label:?} week {week}: n in {lo}–{hi}, so {short} of {started} stopped"
                    ));
                }
            }
        }
        found
    };
    let release = publish_in_order(std::slice::from_ref(&people), min as u32);
    let found = check(&release[0].report);
    assert!(found.is_empty(), "{found:#?}");
    // The attack's preconditions hold (it failed before the bands were audited across the
    // sections): both sites have a section, every number started is printed, and week 6 still
    // has its mean in both the program and Kiln Row.
    let r = &release[0].report;
    let sites = r["splits"][0]["sections"].as_array().unwrap();
    assert_eq!(sites.len(), 2, "both sites have a section");
    let started = |st: &Value| st["enrolment"]["started"]["value"].as_u64();
    assert_eq!(started(&r["program"]["stats"]), Some(44));
    let kiln = sites.iter().find(|s| s["label"] == "Kiln Row").unwrap();
    assert_eq!(started(&kiln["stats"]), Some(23));
    for st in [&r["program"]["stats"], &kiln["stats"]] {
        assert!(st["trajectory"][5]["mean_percent"].get("value").is_some());
    }
    // What is still printed for week 6 holds the truth (22 people).
    for st in [&r["program"]["stats"], &kiln["stats"]] {
        if let Some((lo, hi)) = read_count(&st["trajectory"][5]["n"]) {
            assert!(lo <= 22 && 22 <= hi);
        }
    }
}

/// Monthly releases of one program, each audited against the ledger of the earlier ones. The
/// first 30 people reach week 20 (5 of them stopped weighing in at week 10, so 25 have a value
/// there); the people who enrol later have not reached it, and a reader who knows when they
/// enrolled knows that week 20's people are the same 25 every month, within month 1's 30
/// started. Bands counted down from each month's number started (30, 46, 60, 69, 81) had
/// shifted and met at two values (25–26), a shortfall of 4 or 5 from month 1's 30. The attacker
/// intersects every month's printed n for week 20 with n ≤ month 1's number started (less one
/// when month 1 printed a band, not 30) and must not narrow the 5 who stopped to fewer than
/// three possible values.
#[test]
fn week_bands_across_monthly_releases_do_not_pin_who_stopped() {
    let min = 11;
    let mut months: Vec<Vec<Person>> = Vec::new();
    let mut people: Vec<Person> = (0..30)
        .map(|i| {
            let mut p = person(&format!("F{i:02}"), "Kiln Row", -4.0, true, -3.0);
            // Enrolled early enough to have every week (their enrolment dates say so).
            p.row.weeks_in_period = Some(24);
            let last = if i < 5 { 10 } else { 24 };
            p.row.weekly_change_percent = (0..last)
                .map(|w| (w, -0.25 * f64::from(w) - 0.01 * i as f64))
                .collect();
            p
        })
        .collect();
    months.push(people.clone());
    for (m, joining) in [16, 14, 9, 12].into_iter().enumerate() {
        for j in 0..joining {
            let mut p = person(&format!("N{m}{j:02}"), "Kiln Row", -1.0, true, -0.5);
            // Enrolled three weeks before the period's end: no later week can be theirs.
            p.row.weeks_in_period = Some(3);
            p.row.weekly_change_percent = (0..3)
                .map(|w| (w, -0.2 * f64::from(w) - 0.01 * j as f64))
                .collect();
            people.push(p);
        }
        months.push(people.clone());
    }
    let week = 19; // week 20 since enrolment
    let truth = 25;
    let first_started = 30;
    let read = |rel: &Release| -> Option<(u64, u64)> {
        let w = rel.report["program"]["stats"]["trajectory"]
            .as_array()?
            .iter()
            .find(|w| w["week"].as_u64() == Some(week))?
            .clone();
        read_count(&w["n"])
    };
    let attack = |releases: &[Release]| -> (u64, u64) {
        let mut lo = u64::from(min);
        let mut hi = first_started;
        for (i, rel) in releases.iter().enumerate() {
            if let Some((a, z)) = read(rel) {
                lo = lo.max(a);
                hi = hi.min(z);
                if i == 0 && z < first_started {
                    hi = hi.min(first_started - 1);
                }
            }
        }
        (lo, hi)
    };
    // Ranges counted down from each month's number started narrow it (the old rule's bands).
    let old_band = |s: u64| {
        let k = (s - truth - 1) / u64::from(min);
        (s - (k + 1) * u64::from(min), s - 1 - k * u64::from(min))
    };
    let (mut olo, mut ohi) = (u64::from(min), first_started - 1);
    for s in [30, 46, 60, 69, 81] {
        let (a, z) = old_band(s);
        olo = olo.max(a);
        ohi = ohi.min(z);
    }
    assert!(ohi < olo + 2, "the old bands met at {olo}–{ohi}");
    let releases = publish_in_order(&months, min);
    let (lo, hi) = attack(&releases);
    assert!(lo <= truth && truth <= hi, "{lo}–{hi}");
    assert!(
        hi >= lo + 2,
        "months together pin week 20's n to {lo}–{hi}: the 5 who stopped"
    );
    // The week's mean is still shown every month.
    for rel in &releases {
        let w = rel.report["program"]["stats"]["trajectory"]
            .as_array()
            .unwrap()
            .iter()
            .find(|w| w["week"].as_u64() == Some(week))
            .unwrap()
            .clone();
        assert!(
            w["mean_percent"].get("value").is_some(),
            "week 20's mean shown"
        );
    }
}

/// The partition's cells are fixed (multiples of min), so a week whose people change by one
/// person a reader knows of between two releases can cross a cell boundary: month 1 prints
/// week 20's n as "33–35" (36 started, 33 with a week-20 value), one of those 33 is taken out
/// of the program before month 2 (a withdrawal the sponsor is told of; nobody else can reach
/// week 20 yet, and past weeks' values do not change), and month 2 prints "22–32". n₁ ≤ n₂ + 1
/// ≤ 33, so n₁ = 33: exactly 3 of month 1's 36 stopped. The attacker intersects month 1's
/// band with month 2's band shifted by the one person removed.
#[test]
fn week_band_crossing_a_cell_edge_when_one_known_person_leaves_does_not_pin_who_stopped() {
    let min = 11;
    let first: Vec<Person> = (0..36)
        .map(|i| {
            let mut p = person(&format!("F{i:02}"), "Kiln Row", -4.0, true, -3.0);
            let last = if i < 33 { 24 } else { 10 };
            p.row.weekly_change_percent = (0..last)
                .map(|w| (w, -0.25 * f64::from(w) - 0.01 * i as f64))
                .collect();
            p
        })
        .collect();
    let mut second: Vec<Person> = first[1..].to_vec(); // F00 (with a week-20 value) leaves
    for j in 0..14 {
        let mut p = person(&format!("N{j:02}"), "Kiln Row", -1.0, true, -0.5);
        p.row.weekly_change_percent = (0..3)
            .map(|w| (w, -0.2 * f64::from(w) - 0.01 * j as f64))
            .collect();
        second.push(p);
    }
    let week = 19;
    let releases = publish_in_order(&[first, second], min);
    let read = |rel: &Release| -> Option<(u64, u64)> {
        let w = rel.report["program"]["stats"]["trajectory"]
            .as_array()?
            .iter()
            .find(|w| w["week"].as_u64() == Some(week))?
            .clone();
        read_count(&w["n"])
    };
    let b1 = read(&releases[0]);
    let b2 = read(&releases[1]);
    eprintln!("month 1 week 20 n: {b1:?}, month 2: {b2:?}");
    let started1 = releases[0].report["program"]["stats"]["enrolment"]["started"]["value"]
        .as_u64()
        .expect("month 1 prints its number started");
    // Month 2's people in week 20 are month 1's less at most the one who left.
    let (lo, hi) = known_range(min, started1, b1, b2);
    assert!(lo <= 33 && 33 <= hi, "{lo}–{hi}");
    assert!(
        hi >= lo + 2,
        "week 20's n in month 1 pinned to {lo}–{hi}: {} of {started1} stopped",
        started1 - 33
    );
}

/// What a reader knows of a week's n: at least `min` and fewer than the number `started` (the
/// rule itself), within the printed band `own`, and at most one more than the printed band
/// `less_one` of a set of people known to be the same less at most one person.
fn known_range(
    min: u32,
    started: u64,
    own: Option<(u64, u64)>,
    less_one: Option<(u64, u64)>,
) -> (u64, u64) {
    let (mut lo, mut hi) = (u64::from(min), started - 1);
    if let Some((a, z)) = own {
        lo = lo.max(a);
        hi = hi.min(z);
    }
    if let Some((a, z)) = less_one {
        lo = lo.max(a);
        hi = hi.min(z + 1);
    }
    (lo, hi)
}

/// The same crossing within one release, with two `group_by` keys: team Ash is site Kiln Row
/// less one person (F00, with a week-20 value) plus two people of Harbour Yard who enrolled
/// lately (no week 20). Kiln Row prints week 20's n as "33–35" (36 started), team Ash "22–32"
/// (37 started). A reader who knows the teams knows Ash's week-20 people are Kiln Row's less at
/// most F00, so Kiln Row's n ≤ 33: exactly 3 of its 36 stopped. The audit across sections
/// only relates the program to the sum of each split's sections, and team Birch (whose only
/// possible week-20 person is F00) is hidden as anything from 0 to under min.
#[test]
fn week_bands_of_two_keys_differing_by_one_person_do_not_pin_who_stopped() {
    let min = 11;
    let mut people: Vec<Person> = Vec::new();
    for i in 0..36 {
        let mut p = person(&format!("F{i:02}"), "Kiln Row", -4.0, true, -3.0);
        let last = if i < 33 { 24 } else { 10 };
        p.row.weekly_change_percent = (0..last)
            .map(|w| (w, -0.25 * f64::from(w) - 0.01 * i as f64))
            .collect();
        let team = if i == 0 { "Birch" } else { "Ash" };
        p.row.groups.insert("team".into(), team.into());
        people.push(p);
    }
    for j in 0..14 {
        let mut p = person(&format!("H{j:02}"), "Harbour Yard", -1.0, true, -0.5);
        p.row.weekly_change_percent = (0..3)
            .map(|w| (w, -0.2 * f64::from(w) - 0.01 * j as f64))
            .collect();
        let team = if j < 2 { "Ash" } else { "Birch" };
        p.row.groups.insert("team".into(), team.into());
        people.push(p);
    }
    let options = GroupOptions {
        min_cell_size: min,
        group_by: vec!["site".into(), "team".into()],
        confidence: 0.95,
    };
    let (report, _) = summarize_release(&rows(&people), &options, &secret());
    let report = serde_json::to_value(report).unwrap();
    let week = 19;
    let section = |label: &str| -> Value {
        report["splits"]
            .as_array()
            .unwrap()
            .iter()
            .flat_map(|s| s["sections"].as_array().unwrap().iter())
            .find(|s| s["label"].as_str() == Some(label))
            .map(|s| s["stats"].clone())
            .unwrap_or(Value::Null)
    };
    let band = |stats: &Value| -> Option<(u64, u64)> {
        let w = stats["trajectory"]
            .as_array()?
            .iter()
            .find(|w| w["week"].as_u64() == Some(week))?
            .clone();
        read_count(&w["n"])
    };
    let (kiln, ash) = (section("Kiln Row"), section("Ash"));
    let (bk, ba) = (band(&kiln), band(&ash));
    eprintln!("Kiln Row week 20 n: {bk:?}, Ash: {ba:?}");
    let started = kiln["enrolment"]["started"]["value"]
        .as_u64()
        .expect("Kiln Row prints its number started");
    let (lo, hi) = known_range(min, started, bk, ba);
    assert!(lo <= 33 && 33 <= hi, "{lo}–{hi}");
    assert!(
        hi >= lo + 2,
        "Kiln Row's week 20 n pinned to {lo}–{hi}: {} of {started} stopped",
        started - 33
    );
}

/// Two monthly releases of a 300-person program in three sites, audited in turn with the
/// ledger: the first month as its figures come (everyone active with a recent weigh-in, one
/// person past 5 % loss; the headline is shown since complements are chosen by their cost in
/// headline counts), the second with one person of Kiln Row withdrawn and two more people past
/// 5 %. The count attacker over both months' enrolled, active and started of every section pins
/// nothing, and the first month's program enrolment is printed exactly.
#[test]
fn a_first_month_shown_for_its_headline_and_the_next_month_pin_nobody() {
    let min = 11;
    // Per site: (people, % change).
    let sites: [(&str, &[(usize, f64)]); 3] = [
        ("Harbour Depot", &[(3, -4.0), (76, -1.5), (8, 1.0)]),
        ("Kiln Row", &[(7, -4.0), (120, -1.5), (10, 1.0), (1, 3.5)]),
        (
            "North Office",
            &[(1, -6.0), (5, -4.0), (57, -1.5), (12, 1.0)],
        ),
    ];
    let mut april = Vec::new();
    for (site, groups) in sites {
        for &(n, change) in groups {
            for _ in 0..n {
                let name = format!("P{:03}", april.len());
                april.push(person(&name, site, change, true, change));
            }
        }
    }
    let mut may = april.clone();
    for p in may
        .iter_mut()
        .filter(|p| p.name == "P100" || p.name == "P200")
    {
        *p = person(
            &p.name.clone(),
            &p.row.groups["site"].clone(),
            -5.5,
            true,
            -5.5,
        );
    }
    let leaver = may.iter_mut().find(|p| p.name == "P150").unwrap();
    assert_eq!(leaver.row.groups["site"], "Kiln Row");
    leaver.row.withdrawn = true;
    leaver.row.outcome_kg = None;
    let rel = publish_in_order(&[april, may], min);
    assert_eq!(
        rel[0].report["program"]["stats"]["enrolment"]["enrolled"]["value"],
        300
    );
    assert_eq!(
        rel[0].report["program"]["stats"]["enrolment"]["started"]["value"],
        300
    );
    assert_eq!(
        count_attack(&rel, u64::from(min)),
        Vec::<Vec<String>>::new()
    );
}

/// Two monthly releases of a 300-person program whose complements the search for a result
/// showing retention chose ([`super::tests::a_later_month`]: active 277, with a recent
/// weigh-in 269, so 8 active people without one, withdrawn 23). In the second month two people
/// with a recent weigh-in withdraw and three of the 8 weigh in again. The attacker knows who is
/// in every count of both releases (who withdrew, who has data, who is in which bin) and reads
/// every printed count and range of both: no count or difference of nested counts of fewer
/// than 11 people is left with fewer than three possible sizes. Without the protection it
/// finds the 8 at once (active − with a recent weigh-in).
#[test]
fn retention_shown_beside_few_active_without_a_weigh_in_pins_nobody_across_two_months() {
    let min = 11;
    let first: Vec<Person> = super::tests::a_later_month(1)
        .into_iter()
        .enumerate()
        .map(|(i, mut row)| {
            let name = format!("P{i:03}");
            row.pseudonym = Some(pseudonym(&name));
            Person { name, row }
        })
        .collect();
    let mut second = first.clone();
    for p in &mut second[100..102] {
        p.row.withdrawn = true;
        p.row.outcome_kg = None;
        p.row.activity_minutes_per_week = None;
        p.row.weigh_ins_per_week = None;
        p.row.food_log_days_per_week = None;
    }
    for p in &mut second[23..26] {
        p.row.outcome_kg = p.row.baseline_kg.map(|b| b * 0.98);
    }
    let months = [first, second];
    let open = unprotected(&months, min);
    let found = attack_releases(&open);
    assert!(
        found
            .iter()
            .any(|f| f.starts_with("#0 program enrolment.active − enrolment.with_outcome = 8")),
        "{found:?}"
    );
    let rel = publish_in_order(&months, min);
    assert_eq!(attack_releases(&rel), Vec::<String>::new());
    // The first month shows the share with a recent weigh-in. (The second month's "with a
    // recent weigh-in" differs from the first's by 5 people, so the ledger hides it.)
    let e = &rel[0].report["program"]["stats"]["enrolment"];
    assert_eq!(e["with_outcome"]["value"], 269);
    assert!(e["with_outcome_percent"]["value"].is_f64(), "{e}");
    assert!(rel[1].report["program"]["stats"]["enrolment"]["with_outcome"]["suppressed"] == true);
}

/// The pattern attacker's findings on a series of releases, each read with its people.
fn attack_releases(rel: &[Release]) -> Vec<String> {
    let rows: Vec<Vec<ParticipantSummary>> = rel.iter().map(|r| rows(&r.people)).collect();
    let both: Vec<(&[ParticipantSummary], &Value)> = rows
        .iter()
        .zip(rel)
        .map(|(rs, r)| (rs.as_slice(), &r.report))
        .collect();
    super::tests::pattern_attack_releases(&both)
}

/// Retention counts withdrawals now (retained = started and not withdrawn), so its count is a
/// new cell a sponsor can set against last month's: one person who withdrew in the month after
/// weighing in (their outcome weight kept, so "with a recent weigh-in" does not move) changed
/// "started and still in the program" by one. The attacker knows who withdrew and reads every
/// printed count and range of both months: nothing of fewer than 11 people is pinned. Without
/// the protection it finds the one at once.
#[test]
fn a_withdrawal_between_two_months_is_not_pinned_by_retention() {
    let min = 11;
    let first: Vec<Person> = cohort(60, &["Kiln Row", "Harbour Yard"], &[4, 9, 30], 5);
    let mut second = first.clone();
    second[12].row.withdrawn = true;
    let months = [first, second];
    let open = unprotected(&months, min);
    let found = attack_releases(&open);
    assert!(
        found.iter().any(|f| f.contains("enrolment.retained")),
        "{found:?}"
    );
    let rel = publish_in_order(&months, min);
    assert_eq!(attack_releases(&rel), Vec::<String>::new());
    // The first month, with nobody withdrawn, prints its retention: 100 %.
    let e = &rel[0].report["program"]["stats"]["enrolment"];
    assert_eq!(e["retention_percent"]["value"], 100.0, "{e}");
    // The second cannot print both months' retained exactly.
    let e2 = &rel[1].report["program"]["stats"]["enrolment"];
    assert!(
        e2["retained"].get("value").is_none() || e["retained"].get("value").is_none(),
        "{e} {e2}"
    );
}

/// Re-issues of one month after participants are removed (withdrawn consent) kept no headline
/// count: each of enrolled, started, with a recent weigh-in and retained counted the removed
/// people, so each differed from the first issue's by 1 … min − 1 people and was hidden, and
/// with every count linked to them hidden too no range bounded them ("Not shown"). They are
/// now printed as their fixed band (`headline_band`), which the counts' attack across the
/// releases cannot narrow to a small group.
#[test]
fn reissues_after_removals_keep_the_headline_counts_as_bands() {
    let min = 11;
    let n = 60;
    let first = cohort(n, &["Kiln Row", "Harbour Yard"], &[3, 8, 13, 21, 34], 5);
    let months: Vec<Vec<Person>> = (0..4).map(|k| first[k..].to_vec()).collect();
    let rel = publish_in_order(&months, min);
    // (The sums' attacker, `attack`, tries every group of up to 10 of 60: too slow here; the
    // sums audit is unchanged.) Every pair of releases, every printed count of the program:
    // the difference of the two figures is never narrowed to fewer than three values that
    // leave out 0 (the removed people are 1 … 3, fewer than min). Without the bands, releases
    // 1 … 3 printed none of these four counts, not even as a range.
    let read = |r: &Release, key: &str| read_count(&r.report["program"]["stats"]["enrolment"][key]);
    for key in [
        "enrolled",
        "started",
        "with_outcome",
        "retained",
        "active",
        "withdrawn",
    ] {
        for (a, ra) in rel.iter().enumerate() {
            for rb in &rel[a + 1..] {
                let (Some((alo, ahi)), Some((blo, bhi))) = (read(ra, key), read(rb, key)) else {
                    continue;
                };
                let (lo, hi) = (alo as i64 - bhi as i64, ahi as i64 - blo as i64);
                assert!(
                    hi - lo >= 2 || lo <= 0 && hi >= 0,
                    "{key}: {alo}..{ahi} against {blo}..{bhi} pins the difference"
                );
            }
        }
    }
    for (k, r) in rel.iter().enumerate() {
        let e = &r.report["program"]["stats"]["enrolment"];
        for (key, truth) in [
            ("enrolled", (n - k) as u64),
            ("started", (n - k) as u64),
            ("retained", (n - k) as u64),
        ] {
            let (lo, hi) = read_count(&e[key])
                .unwrap_or_else(|| panic!("release {k}: {key} not shown: {}", e[key]));
            assert!(lo <= truth && truth <= hi, "release {k}: {key} {lo}..{hi}");
            if k >= 1 {
                // Hidden against the first issue: no narrower than its band.
                let (blo, bhi) = super::summary::headline_band(truth, min);
                assert!(lo >= blo && hi <= bhi, "release {k}: {key} {lo}..{hi}");
            }
        }
    }
}

/// The program's week mean is its sites' means weighted by their n. Two sites, all 40 weighing
/// in until week 8, then one person of Kiln Row's 22 stops: Kiln Row's n is printed as the
/// band "11–21", Harbour Yard's as 18 (all of them), the program's as "11–39"; but with the
/// three means printed (to 0.01), only one n of Kiln Row makes the program's mean the weighted
/// mean of the sites' — 21, the one who stopped (found in a 40-person demo, and in the sample
/// program's September, week 14, narrowed to 12 or 13 of 14). The attacker tries every n the
/// bands leave and keeps those for which |Σ n_s (m_s − M)| ≤ 0.01 · Σ n_s; no shortfall of
/// 1 … min − 1 may be left with fewer than three values.
#[test]
fn week_means_of_a_split_do_not_weigh_out_who_stopped() {
    let min = 11;
    let people = two_sites_one_stopped();
    let attack = |report: &Value| -> Vec<String> {
        let week_of = |st: &Value, w: u64| -> Option<((u64, u64), f64)> {
            let p = st["trajectory"]
                .as_array()?
                .iter()
                .find(|p| p["week"].as_u64() == Some(w))?;
            Some((read_count(&p["n"])?, p["mean_percent"]["value"].as_f64()?))
        };
        let sites = report["splits"][0]["sections"].as_array().unwrap();
        let mut found = Vec::new();
        for w in 0..12 {
            let Some(((plo, phi), m0)) = week_of(&report["program"]["stats"], w) else {
                continue;
            };
            let Some(s) = sites
                .iter()
                .map(|s| week_of(&s["stats"], w))
                .collect::<Option<Vec<_>>>()
            else {
                continue;
            };
            let [((alo, ahi), ma), ((blo, bhi), mb)] = s[..] else {
                panic!("two sites")
            };
            let mut fit: Vec<(u64, u64)> = Vec::new();
            for a in alo..=ahi {
                for b in blo..=bhi {
                    let n = a + b;
                    let off = a as f64 * (ma - m0) + b as f64 * (mb - m0);
                    if (plo..=phi).contains(&n) && off.abs() <= 0.01 * n as f64 + 1e-9 {
                        fit.push((a, b));
                    }
                }
            }
            for (k, site) in sites.iter().enumerate() {
                let started = site["stats"]["enrolment"]["started"]["value"]
                    .as_u64()
                    .unwrap();
                let values: std::collections::BTreeSet<u64> = fit
                    .iter()
                    .map(|&(a, b)| if k == 0 { a } else { b })
                    .collect();
                let shortfalls: Vec<u64> = values.iter().map(|n| started - n).collect();
                if values.len() < 3 && shortfalls.iter().any(|s| (1..min).contains(s)) {
                    found.push(format!(
                        "{} week {}: n in {values:?} of {started} started",
                        site["label"],
                        w + 1
                    ));
                }
            }
        }
        found
    };
    let release = publish_in_order(std::slice::from_ref(&people), min as u32);
    let report = &release[0].report;
    let found = attack(report);
    assert!(found.is_empty(), "{found:#?}");
    // The preconditions: both sites have a section, and the program's means and Kiln Row's
    // still print from week 9 on (the withheld one is the smaller site's).
    let sites = report["splits"][0]["sections"].as_array().unwrap();
    assert_eq!(sites.len(), 2);
    let kiln = sites.iter().find(|s| s["label"] == "Kiln Row").unwrap();
    for st in [&report["program"]["stats"], &kiln["stats"]] {
        assert!(st["trajectory"][9]["mean_percent"].get("value").is_some());
    }
    // The audit notes say which week means were withheld and why.
    assert!(
        report["audit"]
            .as_array()
            .unwrap()
            .iter()
            .any(|a| a["section"] == "Harbour Yard"
                && a["figure"] == "mean change in week 9"
                && a["rule"].as_str().unwrap().contains("stopped")),
        "{:#}",
        report["audit"]
    );
}

/// 40 people weighed weekly for 12 weeks at two sites: Kiln Row's 22 (one of whom stops after
/// week 8) and Harbour Yard's 18, whose weekly changes differ by site and person.
fn two_sites_one_stopped() -> Vec<Person> {
    (0..40)
        .map(|i| {
            let (site, weeks, slope) = if i < 22 {
                ("Kiln Row", if i == 0 { 8 } else { 12 }, -0.5)
            } else {
                ("Harbour Yard", 12, -0.2)
            };
            let mut p = person(&format!("P{i:02}"), site, -3.0 - (i % 5) as f64, true, -2.0);
            p.row.weekly_change_percent = (0..weeks)
                .map(|w| (w, slope * f64::from(w) - 0.013 * i as f64))
                .collect();
            p
        })
        .collect()
}

/// The same weighted-mean attack over two releases. Twelve people who enrol late at the
/// smaller site (Harbour Yard, 18 → 30 started) make it the larger one by the second release,
/// while the later weeks' figures stay the same (the newcomers have no data in them yet). The
/// first release withholds Harbour Yard's means of weeks 9–12 beside Kiln Row's band "11–21"
/// (one person stopped); were the second to print them and withhold Kiln Row's instead (the
/// section with the fewest people started has changed), a sponsor who keeps both would read
/// every mean of those weeks, and Σ n_s (m_s − M) = 0 would give Kiln Row's n, 21 of 22. The
/// attacker takes each site's band from both releases (the true n is the same) and each mean
/// from whichever release prints it.
#[test]
fn week_means_withheld_in_one_release_are_not_printed_in_the_next() {
    let min = 11;
    let first = two_sites_one_stopped();
    let mut second = first.clone();
    for i in 40..52 {
        let mut p = person(&format!("P{i:02}"), "Harbour Yard", -1.0, true, -1.0);
        p.row.weekly_change_percent = (0..2).map(|w| (w, -0.3 * f64::from(w))).collect();
        second.push(p);
    }
    let releases = publish_in_order(&[first, second], min as u32);
    // Per week: the program's n and mean, and each site's n (bands intersected over the two
    // releases: the true n is the same) and mean (from whichever release prints it; a mean
    // printed in both is the same number).
    let week_of = |st: &Value, w: u64| -> Option<((u64, u64), Option<f64>)> {
        let p = st["trajectory"]
            .as_array()?
            .iter()
            .find(|p| p["week"].as_u64() == Some(w))?;
        Some((read_count(&p["n"])?, p["mean_percent"]["value"].as_f64()))
    };
    let site = |r: &Value, label: &str| -> Value {
        r["splits"][0]["sections"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["label"] == label)
            .unwrap_or_else(|| panic!("{label} has a section"))["stats"]
            .clone()
    };
    let mut found = Vec::new();
    let mut withheld_somewhere = 0;
    for w in 8..12 {
        let mut known: Vec<((u64, u64), Option<f64>)> = Vec::new();
        for label in ["program", "Kiln Row", "Harbour Yard"] {
            let mut band = (0, u64::MAX);
            let mut mean = None;
            for r in &releases {
                let st = if label == "program" {
                    r.report["program"]["stats"].clone()
                } else {
                    site(&r.report, label)
                };
                if let Some(((lo, hi), m)) = week_of(&st, w) {
                    band = (band.0.max(lo), band.1.min(hi));
                    mean = mean.or(m);
                }
            }
            known.push((band, mean));
        }
        let [((plo, phi), Some(m0)), ((alo, ahi), ma), ((blo, bhi), mb)] = known[..] else {
            continue;
        };
        let (Some(ma), Some(mb)) = (ma, mb) else {
            withheld_somewhere += 1;
            continue;
        };
        let mut kiln = std::collections::BTreeSet::new();
        for a in alo..=ahi {
            for b in blo..=bhi {
                let n = a + b;
                let off = a as f64 * (ma - m0) + b as f64 * (mb - m0);
                if (plo..=phi).contains(&n) && off.abs() <= 0.01 * n as f64 + 1e-9 {
                    kiln.insert(a);
                }
            }
        }
        if kiln.len() < 3 {
            found.push(format!("week {}: Kiln Row n in {kiln:?} of 22", w + 1));
        }
    }
    assert!(found.is_empty(), "{found:#?}");
    assert_eq!(withheld_somewhere, 4);
    // The precondition: the first release prints Kiln Row's means and band and withholds
    // Harbour Yard's means for weeks 9–12, the half of the attack a sponsor already holds.
    let first = &releases[0].report;
    for w in 8..12 {
        let (kiln_n, kiln_mean) = week_of(&site(first, "Kiln Row"), w).unwrap();
        assert_eq!(kiln_n, (11, 21));
        assert!(kiln_mean.is_some());
        assert_eq!(week_of(&site(first, "Harbour Yard"), w).unwrap().1, None);
    }
}

/// Two `group_by` keys cut each other into site-and-team groups that no section counts. Sites
/// A, B, C, D and teams X, Y, Z in a chain — A's 12 all in X, X's other 12 in B, B's other 3
/// in Y, Y's other 12 in C, C's other 12 in Z, Z's other 12 are D — printed every section's
/// enrolled count exactly, and B's 3 people in team Y were B − (X − A) = 15 − (24 − 12): no two
/// printed counts differ by them (X − A is 12), so the nested pairs and the relations
/// program = Σ sections never saw the group. The attacker knows who is in which site and team
/// (the cells of the chain, all others empty), takes every printed enrolled count or range as a
/// bound on the sum of its cells, and narrows each cell by interval propagation; no cell of
/// 1 … min − 1 people may be left with fewer than three values.
#[test]
fn crossed_splits_do_not_give_away_a_site_and_team_group() {
    let min = 11;
    let cells = [
        ("A", "X", 12),
        ("B", "X", 12),
        ("B", "Y", 3),
        ("C", "Y", 12),
        ("C", "Z", 12),
        ("D", "Z", 12),
    ];
    let mut people = Vec::new();
    for &(site, team, n) in &cells {
        for _ in 0..n {
            let i = people.len();
            let mut p = person(&format!("P{i:02}"), site, -2.0 - (i % 9) as f64, true, -1.0);
            p.row.groups.insert("team".into(), team.into());
            people.push(p);
        }
    }
    let o = GroupOptions {
        min_cell_size: min,
        group_by: vec!["site".into(), "team".into()],
        confidence: 0.95,
    };
    let attack = |report: &Value| -> Vec<String> {
        // Per printed section: which cells it holds and what it prints of its enrolled count.
        let mut bounds: Vec<(Vec<usize>, (u64, u64))> = Vec::new();
        let all: Vec<usize> = (0..cells.len()).collect();
        if let Some(b) = read_count(&report["program"]["stats"]["enrolment"]["enrolled"]) {
            bounds.push((all, b));
        }
        for (k, split) in report["splits"].as_array().unwrap().iter().enumerate() {
            for sec in split["sections"].as_array().unwrap() {
                let Some(b) = read_count(&sec["stats"]["enrolment"]["enrolled"]) else {
                    continue;
                };
                let label = sec["label"].as_str().unwrap();
                let held: Vec<usize> = (0..cells.len())
                    .filter(|&c| [cells[c].0, cells[c].1][k] == label)
                    .collect();
                bounds.push((held, b));
            }
        }
        let mut cell: Vec<(u64, u64)> = vec![(0, 100); cells.len()];
        for _ in 0..50 {
            for (held, (lo, hi)) in &bounds {
                let lo_sum: u64 = held.iter().map(|&c| cell[c].0).sum();
                let hi_sum: u64 = held.iter().map(|&c| cell[c].1).sum();
                for &c in held {
                    let others = (lo_sum - cell[c].0, hi_sum - cell[c].1);
                    cell[c] = (
                        cell[c].0.max(lo.saturating_sub(others.1)),
                        cell[c].1.min(hi.saturating_sub(others.0)),
                    );
                }
            }
        }
        cells
            .iter()
            .zip(&cell)
            .filter(|&(&(_, _, n), &(lo, hi))| (1..u64::from(min)).contains(&n) && hi < lo + 2)
            .map(|(&(s, t, n), &(lo, hi))| format!("site {s}, team {t}: {n} people, {lo}–{hi}"))
            .collect()
    };
    let rows = rows(&people);
    let report = serde_json::to_value(summarize(&rows, &o)).unwrap();
    // The sections exist (each has at least min people), so the attack's preconditions hold.
    let labels: Vec<&str> = report["splits"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|s| s["sections"].as_array().unwrap())
        .map(|s| s["label"].as_str().unwrap())
        .collect();
    assert_eq!(labels, ["A", "B", "C", "D", "X", "Y", "Z"]);
    let found = attack(&report);
    assert!(found.is_empty(), "{found:#?}");
    // Without the protection the attack works (so it is a real attack).
    let bare = serde_json::to_value(
        build(
            &rows,
            &GroupOptions {
                min_cell_size: 0,
                ..o.clone()
            },
            true,
            &History::default(),
        )
        .0,
    )
    .unwrap();
    assert_eq!(attack(&bare), ["site B, team Y: 3 people, 3–3"]);
}

/// Three sites whose people all stop weighing in a few at a time: Aspen's 14 (two stop after
/// week 8), Birch's 15 (three), Cedar's 16 (one), weighed weekly for 12 weeks, each person
/// losing at a pace of their own around the site's.
fn three_sites_some_stopped() -> Vec<Person> {
    let sites = [
        ("Aspen", 14, 2, -0.45),
        ("Birch", 15, 3, -0.3),
        ("Cedar", 16, 1, -0.15),
    ];
    let mut out = Vec::new();
    let mut i = 0;
    for (site, size, stopped, slope) in sites {
        for k in 0..size {
            let weeks = if k < stopped { 8 } else { 12 };
            // A pace of one's own: the site's, ± up to 0.2 % a week, spread by a fixed cycle.
            let own = slope + 0.1 * f64::from((i * 7 % 5) as u32) - 0.2;
            let mut p = person(&format!("P{i:02}"), site, -3.0, true, -2.0);
            p.row.weekly_change_percent = (0..weeks)
                .map(|w| {
                    (
                        w,
                        own * f64::from(w + 1) - 0.05 * f64::from((i * 3 % 4) as u32),
                    )
                })
                .collect();
            out.push(p);
            i += 1;
        }
    }
    out
}

/// What the weighted-mean identities leave of each site's n in week `w`: every assignment of
/// whole numbers within the printed bands (the program's n their sum, within its band) that
/// fits both Σ n_s (m_s − M) = 0 and the pooled variance, (N − 1) S² = Σ (n_s − 1) s_s² +
/// Σ n_s (m_s − M)², each SD read off its printed 95 % interval (half-width t · s/√n), every
/// printed figure taken as exact within its rounding (0.01). Per site: (label, number started,
/// the n left). `None` when some figure is not printed.
fn weigh_out_week(report: &Value, w: u64) -> Option<Vec<(String, u64, Vec<u64>)>> {
    struct Fig {
        band: (u64, u64),
        mean: f64,
        half: f64,
    }
    let fig = |st: &Value| -> Option<Fig> {
        let p = st["trajectory"]
            .as_array()?
            .iter()
            .find(|p| p["week"].as_u64() == Some(w))?;
        let ci = &p["ci"]["value"];
        Some(Fig {
            band: read_count(&p["n"])?,
            mean: p["mean_percent"]["value"].as_f64()?,
            half: (ci["hi"].as_f64()? - ci["lo"].as_f64()?) / 2.0,
        })
    };
    let prog = fig(&report["program"]["stats"])?;
    let sections = report["splits"][0]["sections"].as_array()?;
    let figs: Vec<Fig> = sections
        .iter()
        .map(|s| fig(&s["stats"]))
        .collect::<Option<_>>()?;
    let t = |n: u64| super::stats::t_quantile(0.975, (n.max(2) - 1) as f64);
    // The pooled sum of squares a site adds, as bounds, for a given n.
    let ss = |f: &Fig, n: u64| -> (f64, f64) {
        let nf = n as f64;
        let s_lo = (f.half - 0.005).max(0.0) * nf.sqrt() / t(n);
        let s_hi = (f.half + 0.005) * nf.sqrt() / t(n);
        let d = (f.mean - prog.mean).abs();
        let (d_lo, d_hi) = ((d - 0.01).max(0.0), d + 0.01);
        (
            (nf - 1.0) * s_lo * s_lo + nf * d_lo * d_lo,
            (nf - 1.0) * s_hi * s_hi + nf * d_hi * d_hi,
        )
    };
    let mut left = vec![std::collections::BTreeSet::new(); figs.len()];
    let mut ns = vec![0u64; figs.len()];
    fn each(figs: &[(u64, u64)], k: usize, ns: &mut Vec<u64>, f: &mut dyn FnMut(&[u64])) {
        if k == figs.len() {
            f(ns);
            return;
        }
        for v in figs[k].0..=figs[k].1 {
            ns[k] = v;
            each(figs, k + 1, ns, f);
        }
    }
    let bands: Vec<(u64, u64)> = figs.iter().map(|f| f.band).collect();
    each(&bands, 0, &mut ns, &mut |ns| {
        let n: u64 = ns.iter().sum();
        if n < prog.band.0 || n > prog.band.1 {
            return;
        }
        let off: f64 = ns
            .iter()
            .zip(&figs)
            .map(|(&k, f)| k as f64 * (f.mean - prog.mean))
            .sum();
        if off.abs() > 0.01 * n as f64 + 1e-9 {
            return;
        }
        let (lo, hi) = ns
            .iter()
            .zip(&figs)
            .map(|(&k, f)| ss(f, k))
            .fold((0.0, 0.0), |a, b| (a.0 + b.0, a.1 + b.1));
        let nf = n as f64;
        let s_lo = (prog.half - 0.005).max(0.0) * nf.sqrt() / t(n);
        let s_hi = (prog.half + 0.005) * nf.sqrt() / t(n);
        if (nf - 1.0) * s_lo * s_lo > hi + 1e-9 || lo > (nf - 1.0) * s_hi * s_hi + 1e-9 {
            return;
        }
        for (k, &v) in ns.iter().enumerate() {
            left[k].insert(v);
        }
    });
    Some(
        sections
            .iter()
            .zip(left)
            .map(|(s, l)| {
                (
                    s["label"].as_str().unwrap_or_default().to_string(),
                    s["stats"]["enrolment"]["started"]["value"]
                        .as_u64()
                        .unwrap_or(0),
                    l.into_iter().collect(),
                )
            })
            .collect(),
    )
}

/// The weighted-mean identities with three sites whose n are all bands. The mean identity is
/// one equation in three unknowns, but the pooled variance is a second, and with sites of 14 to
/// 16 people the bands leave few whole numbers to try: before, nothing was withheld when three
/// or more sections' n were bands, and the attacker below read Aspen's n in weeks 9–12 as 11
/// or 12 of 14 (two had stopped) and Cedar's as 14 or 15 of 16 (one). The attacker must
/// narrow no site's shortfall of
/// 1 … min − 1 to fewer than three values.
#[test]
fn week_means_of_three_banded_sites_do_not_weigh_out_who_stopped() {
    let min: u64 = 11;
    let people = three_sites_some_stopped();
    let release = publish_in_order(std::slice::from_ref(&people), min as u32);
    let report = &release[0].report;
    let attack = |report: &Value| -> Vec<String> {
        let mut found = Vec::new();
        for w in 0..12 {
            for (label, started, left) in weigh_out_week(report, w).unwrap_or_default() {
                let short: Vec<u64> = left.iter().map(|n| started - n).collect();
                if !left.is_empty() && left.len() < 3 && short.iter().any(|s| (1..min).contains(s))
                {
                    found.push(format!(
                        "{label} week {}: n in {left:?} of {started}",
                        w + 1
                    ));
                }
            }
        }
        found
    };
    let found = attack(report);
    assert!(found.is_empty(), "{found:#?}");
    // The preconditions: three site sections with their n as bands in weeks 9–12, and the
    // program's means shown there.
    let sites = report["splits"][0]["sections"].as_array().unwrap();
    assert_eq!(sites.len(), 3);
    for w in 8..12 {
        assert!(
            report["program"]["stats"]["trajectory"][w]["mean_percent"]
                .get("value")
                .is_some()
        );
        for s in sites {
            let n = read_count(&s["stats"]["trajectory"][w]["n"]).unwrap();
            assert!(n.0 < n.1, "{}: week {} n {n:?}", s["label"], w + 1);
        }
    }
}

/// The same attack over two releases: three people enrol late at Aspen (14 → 17 started), so
/// the section with the fewest people started is Birch in the second release, while weeks
/// 9–12 hold the same people and values in both (the newcomers have only weeks 1–2). Were
/// the first release to withhold Aspen's means and the second Birch's, a sponsor holding both
/// would read every site's mean of those weeks. The attacker takes each figure of each week
/// from whichever release prints it (the bands intersected).
#[test]
fn week_means_of_three_banded_sites_across_releases_do_not_weigh_out_who_stopped() {
    let min: u64 = 11;
    let first = three_sites_some_stopped();
    let mut second = first.clone();
    for i in 45..48 {
        let mut p = person(&format!("P{i:02}"), "Aspen", -1.0, true, -1.0);
        p.row.weekly_change_percent = (0..2).map(|w| (w, -0.3 * f64::from(w + 1))).collect();
        second.push(p);
    }
    let releases = publish_in_order(&[first, second], min as u32);
    // One report holding, per section and week, whatever either release prints.
    let mut merged = releases[1].report.clone();
    let earlier = &releases[0].report;
    fn take_missing(now: &mut Value, old: &Value) {
        for p in now.as_array_mut().unwrap() {
            let Some(o) = old
                .as_array()
                .unwrap()
                .iter()
                .find(|o| o["week"] == p["week"])
            else {
                continue;
            };
            if p["mean_percent"].get("value").is_none() && o["mean_percent"].get("value").is_some()
            {
                p["mean_percent"] = o["mean_percent"].clone();
                p["ci"] = o["ci"].clone();
            }
            let (a, b) = (read_count(&p["n"]), read_count(&o["n"]));
            if let Some((a, b)) = a.or(b).zip(b.or(a)) {
                let (lo, hi) = (a.0.max(b.0), a.1.min(b.1));
                p["n"] = if lo == hi {
                    serde_json::json!({ "value": lo })
                } else {
                    serde_json::json!({ "suppressed": true, "at_least": lo, "at_most": hi })
                };
            }
        }
    }
    take_missing(
        &mut merged["program"]["stats"]["trajectory"],
        &earlier["program"]["stats"]["trajectory"],
    );
    for s in merged["splits"][0]["sections"].as_array_mut().unwrap() {
        let old = earlier["splits"][0]["sections"]
            .as_array()
            .unwrap()
            .iter()
            .find(|o| o["label"] == s["label"])
            .expect("the same sites");
        take_missing(&mut s["stats"]["trajectory"], &old["stats"]["trajectory"]);
    }
    let mut found = Vec::new();
    for w in 8..12 {
        for (label, started, left) in weigh_out_week(&merged, w).unwrap_or_default() {
            // Aspen's number started differs between the releases: its shortfall in the
            // first, 14 − n.
            let started = if label == "Aspen" { 14 } else { started };
            let short: Vec<u64> = left.iter().map(|n| started - n).collect();
            if !left.is_empty() && left.len() < 3 && short.iter().any(|s| (1..min).contains(s)) {
                found.push(format!(
                    "{label} week {}: n in {left:?} of {started}",
                    w + 1
                ));
            }
        }
    }
    assert!(found.is_empty(), "{found:#?}");
    // The precondition: the first release withholds Aspen's means of weeks 9–12 and prints
    // Birch's.
    let site = |r: &Value, label: &str| -> Value {
        r["splits"][0]["sections"]
            .as_array()
            .unwrap()
            .iter()
            .find(|s| s["label"] == label)
            .unwrap()["stats"]
            .clone()
    };
    for w in 8..12 {
        assert!(
            site(earlier, "Aspen")["trajectory"][w]["mean_percent"]
                .get("value")
                .is_none()
        );
        assert!(
            site(earlier, "Birch")["trajectory"][w]["mean_percent"]
                .get("value")
                .is_some()
        );
    }
    // And the second release's smallest site by number started is Birch: Aspen's 17 is
    // printed only as a range (3 more than the 14 printed before).
    let second = &releases[1].report;
    assert_eq!(site(second, "Birch")["enrolment"]["started"]["value"], 15);
    assert!(
        site(second, "Aspen")["enrolment"]["started"]
            .get("value")
            .is_none()
    );
}

/// (measure, the (person, value bits) it was taken over, the printed median).
type PrintedMedian = (&'static str, BTreeSet<(String, u64)>, f64);

/// Every adherence median a release prints, as (measure, the (person, value bits) it was taken
/// over): the attacker knows who is in each section and who has a value (worst case).
fn printed_medians(rel: &Release) -> Vec<PrintedMedian> {
    const MEASURES: [&str; 4] = [
        "activity_minutes_per_week",
        "weigh_ins_per_week",
        "food_log_days_per_week",
        "attendance_to_date_percent",
    ];
    let value = |p: &Person, m: &str| match m {
        "activity_minutes_per_week" => p.row.activity_minutes_per_week,
        "weigh_ins_per_week" => p.row.weigh_ins_per_week,
        "food_log_days_per_week" => p.row.food_log_days_per_week,
        _ => p.row.attendance_percent,
    };
    let mut sections: Vec<(Vec<&Person>, &Value)> = Vec::new();
    if let Some(st) = rel.report["program"].get("stats").filter(|s| !s.is_null()) {
        sections.push((rel.people.iter().collect(), st));
    }
    for split in rel.report["splits"].as_array().unwrap() {
        for sec in split["sections"].as_array().unwrap() {
            let Some(st) = sec.get("stats").filter(|s| !s.is_null()) else {
                continue;
            };
            let labels: Vec<String> = if sec["kind"] == "combined" {
                sec["members"]
                    .as_array()
                    .unwrap()
                    .iter()
                    .map(|m| m.as_str().unwrap().to_string())
                    .collect()
            } else {
                vec![sec["label"].as_str().unwrap().to_string()]
            };
            let members = rel
                .people
                .iter()
                .filter(|p| labels.contains(&p.row.groups["site"]))
                .collect();
            sections.push((members, st));
        }
    }
    let mut out = Vec::new();
    for (members, st) in sections {
        for m in MEASURES {
            if let Some(v) = st["adherence"][m]["median"]["value"].as_f64() {
                let over = members
                    .iter()
                    .filter_map(|p| value(p, m).map(|x| (p.name.clone(), x.to_bits())))
                    .collect();
                out.push((m, over, v));
            }
        }
    }
    out
}

/// Pairs of printed medians of one measure (in any releases) whose values differ in 1 … min − 1
/// people: the second moved from the first only with those few people's values.
fn median_attack(releases: &[Release], min: usize) -> Vec<String> {
    let all: Vec<_> = releases.iter().flat_map(printed_medians).collect();
    let mut found = Vec::new();
    for (i, a) in all.iter().enumerate() {
        for b in &all[i + 1..] {
            let people: BTreeSet<&String> =
                a.1.symmetric_difference(&b.1).map(|(n, _)| n).collect();
            if a.0 == b.0 && !people.is_empty() && people.len() < min {
                found.push(format!(
                    "{}: {} then {}, moved by {people:?} alone",
                    a.0, a.2, b.2
                ));
            }
        }
    }
    found
}

/// A month run again after one person's sessions file was fixed: every count and mean of the
/// two group reports is the same, and the attendance median moved with that one person's
/// value. Demo, 80 people, September: SG-026's 11 of 16 sessions fixed to 14 of 16, and the
/// whole program's and North Office's median went 70 → 75 %, all else unchanged. The median
/// printed again must not move with fewer than min people's values.
#[test]
fn a_median_printed_again_after_one_persons_value_changed_shows_nothing_of_them() {
    let min = 5;
    let mut first = cohort(20, &["Kiln Row", "Harbour Yard"], &[], 9);
    for (i, p) in first.iter_mut().enumerate() {
        p.row.attendance_percent = Some(40.0 + 3.0 * i as f64);
    }
    // P09 (Harbour Yard) 67 % → 55 %: the program's median 70 → 65, Harbour Yard's 70 → 65.
    let mut fixed = first.clone();
    fixed[9].row.attendance_percent = Some(55.0);
    let months = [first, fixed];
    let open = unprotected(&months, min);
    assert!(!median_attack(&open, min as usize).is_empty());
    let moved = |r: &[Release]| {
        let m = |x: &Release| r_median(&x.report["program"]);
        (m(&r[0]), m(&r[1]))
    };
    assert_eq!(moved(&open), (Some(70.0), Some(65.0)), "the attack is real");
    let rel = publish_in_order(&months, min);
    assert_eq!(median_attack(&rel, min as usize), Vec::<String>::new());
    // The first release still shows its medians; the second says why one is missing.
    assert_eq!(moved(&rel).0, Some(70.0));
    let notes = rel[1].report["audit"].to_string();
    assert!(notes.contains("median session attendance"), "{notes}");
}

fn r_median(section: &Value) -> Option<f64> {
    section["stats"]["adherence"]["attendance_to_date_percent"]["median"]["value"].as_f64()
}

/// Every count a section prints, by its path in the section's statistics: `(lo, hi)` as the
/// reader reads it (a value is `(v, v)`). Means, shares and intervals are not counts.
fn section_counts(section: &Value) -> BTreeMap<String, (u64, u64)> {
    fn walk(v: &Value, path: String, out: &mut BTreeMap<String, (u64, u64)>) {
        if let Some(c) = read_count(v) {
            out.insert(path, c);
            return;
        }
        match v {
            Value::Object(m) => {
                for (k, x) in m {
                    walk(x, format!("{path}.{k}"), out);
                }
            }
            Value::Array(a) => {
                for (i, x) in a.iter().enumerate() {
                    walk(x, format!("{path}[{i}]"), out);
                }
            }
            _ => {}
        }
    }
    let mut out = BTreeMap::new();
    walk(&section["stats"], String::new(), &mut out);
    out
}

/// The sections of a report by label (the whole program and every shown section).
fn sections_by_label(report: &Value) -> BTreeMap<String, Value> {
    let mut out = BTreeMap::from([("Whole program".to_string(), report["program"].clone())]);
    for split in report["splits"].as_array().into_iter().flatten() {
        for s in split["sections"].as_array().into_iter().flatten() {
            if let Some(l) = s["label"].as_str() {
                out.insert(l.to_string(), s.clone());
            }
        }
    }
    out
}

/// The roster attacker: two issues of one month whose people differ only in `who` (joined,
/// left, or moved site), everyone else's data the same. The sponsor knows who it is. In a
/// section that holds `who` in one issue only, each count can differ between the issues only
/// by `who`: 0 or 1. Where the printed figures leave one of the two, whether `who` is counted
/// is given away, unless the issue holding `who` already says it alone (a count printed as 0,
/// or as the section's whole enrolment).
fn roster_attack(with: &Release, without: &Release, who: &str) -> Vec<String> {
    let site = |r: &Release| {
        r.people
            .iter()
            .find(|p| p.name == who)
            .and_then(|p| p.row.groups.get("site").cloned())
    };
    let (a, b) = (site(with), site(without));
    let mut found = Vec::new();
    let (sw, so) = (
        sections_by_label(&with.report),
        sections_by_label(&without.report),
    );
    for (label, s_with) in &sw {
        let Some(s_without) = so.get(label) else {
            continue;
        };
        // Only where the section's people differ by `who`.
        let holds =
            |site: &Option<String>| label == "Whole program" || site.as_deref() == Some(label);
        if holds(&a) == holds(&b) || !holds(&a) {
            continue;
        }
        let (cw, co) = (section_counts(s_with), section_counts(s_without));
        let everyone = cw.get(".enrolment.enrolled").copied();
        for (path, &(lw, hw)) in &cw {
            let Some(&(lo, ho)) = co.get(path) else {
                continue;
            };
            // The issue holding them says it alone: nobody counted, or everybody.
            if hw == 0 || (lw == hw && everyone == Some((lw, lw))) {
                continue;
            }
            let out = lw <= ho && lo <= hw;
            let counted = lw <= ho + 1 && lo < hw;
            if out != counted {
                found.push(format!(
                    "{label}{path}: {lw}–{hw} with {who}, {lo}–{ho} without: {who} {}",
                    if counted {
                        "is counted"
                    } else {
                        "is not counted"
                    }
                ));
            }
        }
    }
    found
}

/// A re-issue of one month after one person joined, left or moved site, everything else the
/// same (80-person demo program, September, the ledger kept: SG-005 of North Office removed
/// printed the program's "did not reach 3 % loss" 23 and "reached 5 % loss" 31 again, beside
/// 57 and 49 hidden as ranges, so SG-005 had reached 3 % but not 5 %; its plateau count
/// "not on a plateau" 17 again put it on a plateau). A count printed again over the same
/// people while its section gained or lost a few people the sponsor knows of says that none
/// of them is counted in it: a 0 among a small group.
#[test]
fn a_count_printed_again_after_one_person_joined_left_or_moved_says_nothing_of_them() {
    let min = 5;
    let base = cohort(24, &["Kiln Row", "Harbour Yard"], &[3, 8], 11);
    let mut joined = base.clone();
    joined.push(person("P99", "Kiln Row", -4.0, true, -2.0));
    let left: Vec<Person> = base.iter().filter(|p| p.name != "P02").cloned().collect();
    let mut moved = base.clone();
    moved[4]
        .row
        .groups
        .insert("site".into(), "Harbour Yard".into());
    let cases: [(&str, [Vec<Person>; 2], &str, bool); 3] = [
        ("join", [base.clone(), joined], "P99", false),
        ("leave", [base.clone(), left], "P02", true),
        ("move", [base.clone(), moved], "P04", true),
    ];
    for (case, months, who, first_holds) in cases {
        let pair = |rel: &[Release]| {
            let (w, o) = if first_holds {
                (&rel[0], &rel[1])
            } else {
                (&rel[1], &rel[0])
            };
            let mut found = roster_attack(w, o, who);
            if case == "move" {
                // Moved: one site lost them (the first issue holds them there), the other
                // gained them (the second does).
                found.extend(roster_attack(&rel[1], &rel[0], who));
            }
            found
        };
        let open = unprotected(&months, min);
        assert!(!pair(&open).is_empty(), "{case}: the attack is real");
        let rel = publish_in_order(&months, min);
        assert_eq!(pair(&rel), Vec::<String>::new(), "{case}");
        // Counts hidden against an earlier report all give one reason: a reason of its own
        // for a count printed again would say it is the earlier number.
        let reasons: BTreeSet<String> = rel[1].report["audit"]
            .as_array()
            .unwrap()
            .iter()
            .filter_map(|n| n["rule"].as_str())
            .filter(|r| r.contains("a count in an earlier report"))
            .map(str::to_string)
            .collect();
        assert_eq!(reasons.len(), 1, "{case}: {reasons:?}");
    }
}

/// A week's mean printed again after one person joined: the same mean over the same people
/// says the newcomer has no value that week (80-person demo, September re-issued with SG-005,
/// whose weigh-ins end in mid-June, added: the program's weeks 10 to 25 printed the same means
/// as before, so SG-005 had stopped weighing in by week 10). The same holds for one who left.
#[test]
fn a_week_mean_printed_again_after_one_person_joined_says_nothing_of_them() {
    let min = 5;
    let mut base = cohort(24, &["Kiln Row", "Harbour Yard"], &[], 12);
    for (i, p) in base.iter_mut().enumerate() {
        let v = -0.5 - i as f64 / 20.0;
        p.row.weekly_change_percent = (0..4).map(|w| (w, v * f64::from(w + 1))).collect();
    }
    let mut newcomer = person("P99", "Kiln Row", -4.0, true, -2.0);
    // Stopped weighing in after week 1.
    newcomer.row.weekly_change_percent = vec![(0, -0.8), (1, -1.7)];
    let mut joined = base.clone();
    joined.push(newcomer);
    let left: Vec<Person> = joined.iter().filter(|p| p.name != "P99").cloned().collect();
    let weeks_attack = |with: &Release, without: &Release| {
        let (sw, so) = (
            sections_by_label(&with.report),
            sections_by_label(&without.report),
        );
        let mut found = Vec::new();
        for label in ["Whole program", "Kiln Row"] {
            let means = |s: &Value| -> BTreeMap<u64, f64> {
                s["stats"]["trajectory"]
                    .as_array()
                    .into_iter()
                    .flatten()
                    .filter_map(|w| {
                        Some((w["week"].as_u64()?, w["mean_percent"]["value"].as_f64()?))
                    })
                    .collect()
            };
            let (a, b) = (means(&sw[label]), means(&so[label]));
            for (w, m) in &a {
                if let Some(o) = b.get(w) {
                    found.push(format!(
                        "{label} week {w}: {m} with P99, {o} without: P99 {}",
                        if m == o {
                            "has no value"
                        } else {
                            "has a value"
                        }
                    ));
                }
            }
        }
        found
    };
    for (case, months) in [
        ("join", [base.clone(), joined.clone()]),
        ("leave", [joined, left]),
    ] {
        let pair = |rel: &[Release]| {
            if case == "join" {
                weeks_attack(&rel[1], &rel[0])
            } else {
                weeks_attack(&rel[0], &rel[1])
            }
        };
        let open = unprotected(&months, min);
        assert!(
            pair(&open).iter().any(|f| f.contains("no value")),
            "{case}: the attack is real: {:?}",
            pair(&open)
        );
        let rel = publish_in_order(&months, min);
        assert_eq!(pair(&rel), Vec::<String>::new(), "{case}");
    }
}

/// The same when nobody joins or leaves: one person enrolled late reaches a week between two
/// monthly releases (their enrolment date, which the reader knows, says they could now have a
/// value in it) but stopped weighing in before it. The week's mean printed again, the same,
/// would say they have none; withheld, whatever they did. A week they could have in both
/// releases is printed in both.
#[test]
fn a_week_mean_printed_again_after_one_person_could_reach_it_says_nothing_of_them() {
    let min = 5;
    let mut base = cohort(24, &["Kiln Row", "Harbour Yard"], &[], 13);
    for (i, p) in base.iter_mut().enumerate() {
        let v = -0.5 - i as f64 / 20.0;
        p.row.weeks_in_period = Some(10);
        p.row.weekly_change_percent = (0..6).map(|w| (w, v * f64::from(w + 1))).collect();
    }
    let mut late = person("P99", "Kiln Row", -4.0, true, -2.0);
    late.row.weekly_change_percent = vec![(0, -0.8), (1, -1.7)];
    let month = |reach: u32| {
        let mut people = base.clone();
        let mut p = late.clone();
        p.row.weeks_in_period = Some(reach);
        people.push(p);
        people
    };
    let months = [month(2), month(6)];
    let means = |rel: &Release, label: &str| -> BTreeMap<u64, f64> {
        sections_by_label(&rel.report)[label]["stats"]["trajectory"]
            .as_array()
            .into_iter()
            .flatten()
            .filter_map(|w| Some((w["week"].as_u64()?, w["mean_percent"]["value"].as_f64()?)))
            .collect()
    };
    let same = |rel: &[Release]| -> Vec<String> {
        let mut found = Vec::new();
        for label in ["Whole program", "Kiln Row"] {
            let (a, b) = (means(&rel[0], label), means(&rel[1], label));
            for (w, m) in &a {
                if (2..6).contains(w) && b.get(w) == Some(m) {
                    found.push(format!("{label} week {w}: {m} again: P99 has no value"));
                }
            }
        }
        found
    };
    let open = unprotected(&months, min);
    assert!(!same(&open).is_empty(), "the attack is real");
    let rel = publish_in_order(&months, min);
    assert_eq!(same(&rel), Vec::<String>::new());
    // Week 1: P99 could have it in both months (and has): printed in both, the same.
    for label in ["Whole program", "Kiln Row"] {
        let (a, b) = (means(&rel[0], label), means(&rel[1], label));
        assert!(
            a.contains_key(&1) && b.get(&1) == a.get(&1),
            "{label}: {a:?} {b:?}"
        );
    }
}

/// Which section's week mean the split's rule withholds must not depend on who has a value.
/// Three banded sites: Aspen 16, Birch 15, Cedar 14 started; the first release withholds
/// Cedar's means of weeks 9–12. In the second, three late enrolees at Cedar (they cannot reach
/// week 3) hide its number started, and one Birch participant who had enrolled too late to
/// reach week 9 now can: Birch's weeks 9–12 are withheld for that reason. Whether that person
/// weighs in or not, the second release must print the same means (taking Birch, whose week's
/// people changed only when they weighed in, printed Cedar's means then and withheld them
/// otherwise).
#[test]
fn the_week_mean_withheld_beside_a_newcomer_to_the_week_does_not_tell_whether_they_weigh_in() {
    let min = 11;
    let mut base = three_sites_some_stopped();
    for p in base.iter_mut() {
        let site = p.row.groups["site"].clone();
        let to = match site.as_str() {
            "Aspen" => "Cedar",
            "Cedar" => "Aspen",
            s => s,
        };
        p.row.groups.insert("site".into(), to.into());
        p.row.weeks_in_period = Some(12);
    }
    // A Birch participant weighed every week (not one of the first three, who stop).
    let late = base
        .iter()
        .position(|p| p.row.groups["site"] == "Birch" && p.row.weekly_change_percent.len() == 12)
        .expect("a Birch participant weighed every week");
    let mut first = base.clone();
    first[late].row.weeks_in_period = Some(8);
    first[late].row.weekly_change_percent.truncate(8);
    let second = |weighs_in: bool| {
        let mut people = base.clone();
        if !weighs_in {
            people[late].row.weekly_change_percent.truncate(8);
        }
        for i in 45..48 {
            let mut p = person(&format!("P{i:02}"), "Cedar", -1.0, true, -1.0);
            p.row.weeks_in_period = Some(2);
            p.row.weekly_change_percent = (0..2).map(|w| (w, -0.3 * f64::from(w + 1))).collect();
            people.push(p);
        }
        people
    };
    let printed = |rel: &Release| -> BTreeMap<(String, u64), bool> {
        sections_by_label(&rel.report)
            .into_iter()
            .flat_map(|(label, s)| {
                s["stats"]["trajectory"]
                    .as_array()
                    .cloned()
                    .unwrap_or_default()
                    .into_iter()
                    .filter_map(move |w| {
                        let week = w["week"].as_u64()?;
                        Some((
                            (label.clone(), week),
                            w["mean_percent"].get("value").is_some(),
                        ))
                    })
            })
            .collect()
    };
    let with = publish_in_order(&[first.clone(), second(true)], min);
    let without = publish_in_order(&[first, second(false)], min);
    let before = printed(&with[0]);
    assert_eq!(
        before.get(&("Cedar".to_string(), 9)),
        Some(&false),
        "the first release withholds Cedar's week 10: {before:?}"
    );
    let (a, b) = (printed(&with[1]), printed(&without[1]));
    let differ: Vec<_> = a.iter().filter(|(k, v)| b.get(*k) != Some(*v)).collect();
    assert!(differ.is_empty(), "the printed means tell: {differ:?}");
}

//! Diagnostic: plateau onset errors per weighing habit and archetype, and the same detector fed
//! with idealised records (true tissue mass / true body weight on the same days, no scale noise),
//! to see how far the timing is from what the data could give.
//!
//! `cargo run -p cohortpress-validation --example plateau_diag -- SEED [MODE]`
//! MODE: obs (default), tissue (true tissue mass, same days), tissue_noise (true tissue mass plus
//! the same scale noise), bw (true body weight, same days), tissue_daily (true tissue every
//! day), bw_daily (true body weight every day), cond (per true onset: the onsets with the band at 0.20 and 0.30 %/wk, and whether the
//! estimate hit), defs (truth applied to body weight instead of tissue), pN (person N day by
//! day; with the environment variable `DIAG_OBS` set to one of the record modes above, person N
//! with those records). `-v` lists every scored person.

use cohortpress_metric_api::{Cell, Targets};
use cohortpress_validation::truth::{self, Archetype, Weighing};
use cohortpress_validation::{
    participant_data, plateau_onset_with_band, run_modules, true_plateau_onset,
};
use std::collections::BTreeMap;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    let seed: u64 = args
        .get(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(20_261_202);
    let mode = args.get(2).cloned().unwrap_or_else(|| "obs".into());
    let verbose = args.iter().any(|a| a == "-v");
    let days = 180;
    let mut by_habit: BTreeMap<&str, Vec<Option<i64>>> = BTreeMap::new();
    let mut by_arch: BTreeMap<&str, Vec<Option<i64>>> = BTreeMap::new();
    let mut falses: BTreeMap<&str, (usize, usize)> = BTreeMap::new();
    for i in 0..300 {
        let mut p = truth::simulate(seed, i, days);
        let shift = p.bw[0] - p.tissue[0];
        let m2 = std::env::var("DIAG_OBS").unwrap_or_else(|_| mode.clone());
        match m2.as_str() {
            "tissue" => {
                for o in &mut p.obs {
                    o.kg = p.tissue[o.day] + shift;
                    o.source = "home-scale";
                }
            }
            "tissue_noise" => {
                for o in &mut p.obs {
                    o.kg = p.tissue[o.day] + shift + (o.kg - p.bw[o.day]);
                }
            }
            "bw" => {
                for o in &mut p.obs {
                    o.kg = p.bw[o.day];
                    o.source = "home-scale";
                }
            }
            "bw_daily" => {
                let last = p.obs.iter().map(|o| o.day).max().unwrap_or(0);
                let proto = p.obs[0].clone();
                p.obs = (0..=last)
                    .map(|d| {
                        let mut o = proto.clone();
                        o.day = d;
                        o.kg = p.bw[d];
                        o.source = "home-scale";
                        o
                    })
                    .collect();
            }
            "tissue_daily" => {
                let last = p.obs.iter().map(|o| o.day).max().unwrap_or(0);
                let proto = p.obs[0].clone();
                p.obs = (0..=last)
                    .map(|d| {
                        let mut o = proto.clone();
                        o.day = d;
                        o.kg = p.tissue[d] + shift;
                        o.source = "home-scale";
                        o
                    })
                    .collect();
            }
            _ => {}
        }
        let data = participant_data(&p, &Targets::default());
        if let Some(k) = mode.strip_prefix("p") {
            if k.parse::<usize>().ok() != Some(i) {
                continue;
            }
            let (trend, _) = run_modules(&data, days, days - 1);
            let s28 = trend.series("weight_slope_28d").unwrap();
            let sl = trend.series("weight_slope").unwrap();
            let shift = p.bw[0] - p.tissue[0];
            println!(
                "onset {:?} withdrew {:?}",
                true_plateau_onset(&p.tissue, &p.bw),
                p.withdrew
            );
            for d in (7..days - 10).step_by(3) {
                let band = 0.0025 * (p.tissue[d] + shift) / 7.0;
                let ts = (p.tissue[d + 7] - p.tissue[d - 7]) / 14.0 / band;
                let bs = (p.bw[d + 7] - p.bw[d - 7]) / 14.0 / band;
                let dt = cohortpress_validation::day0() + chrono::Days::new(d as u64);
                let c28 = s28
                    .points
                    .iter()
                    .find(|q| q.date == dt + chrono::Days::new(14))
                    .map(|q| q.value / band);
                let sm = sl
                    .points
                    .iter()
                    .find(|q| q.date == dt)
                    .map(|q| q.value / band);
                let ob = p.obs.iter().filter(|o| o.day == d).count();
                println!(
                    "{d:3} tissue14 {ts:6.2} bw14 {bs:6.2} est28c {:6.2} smslope {:6.2} loss {:.1}% int {:.0} {ob}",
                    c28.unwrap_or(f64::NAN),
                    sm.unwrap_or(f64::NAN),
                    100.0 * (p.tissue[0] - p.tissue[d]) / p.bw[0],
                    p.intake[d]
                );
            }
            println!("{:?}", trend.table("periods").map(|t| t.rows.clone()));
            return;
        }
        let (trend, _) = run_modules(&data, days, days - 1);
        let onset = true_plateau_onset(&p.tissue, &p.bw);
        if mode == "cond" {
            if let Some(t) = onset.filter(|t| p.withdrew.is_none_or(|w| w >= t + 28)) {
                let lo = plateau_onset_with_band(&p.tissue, &p.bw, 0.0020);
                let hi = plateau_onset_with_band(&p.tissue, &p.bw, 0.0030);
                let moved = |o: Option<usize>| o.is_none_or(|o| (o as i64 - t as i64).abs() > 14);
                let data = participant_data(&p, &Targets::default());
                let (trend, _) = run_modules(&data, days, days - 1);
                let est = trend.table("periods").and_then(|t| {
                    t.rows
                        .iter()
                        .find(|r| matches!(&r[0], Cell::Text(k) if k == "plateau"))
                        .and_then(|r| match &r[1] {
                            Cell::Text(s) => chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d")
                                .ok()
                                .map(|d| (d - cohortpress_validation::day0()).num_days()),
                            _ => None,
                        })
                });
                let hit = est.is_some_and(|e| (e - t as i64).abs() <= 14);
                println!(
                    "{i:3} {:>16} {:>20} t {t} band0.20 {lo:?} band0.30 {hi:?} ILL {} HIT {hit}",
                    p.weighing.name(),
                    p.archetype.name(),
                    moved(lo) || moved(hi)
                );
            }
            continue;
        }
        if mode == "defs" {
            let on_bw = true_plateau_onset(&p.bw, &p.bw);
            if let (Some(a), Some(b)) = (onset, on_bw) {
                println!(
                    "{i:3} {:>16} {:>20} tissue {a} bw {b} diff {}",
                    p.weighing.name(),
                    p.archetype.name(),
                    b as i64 - a as i64
                );
            } else if onset.is_some() != on_bw.is_some() {
                println!(
                    "{i:3} {:>16} {:>20} tissue {onset:?} bw {on_bw:?}",
                    p.weighing.name(),
                    p.archetype.name()
                );
            }
            continue;
        }
        let starts: Vec<i64> = trend
            .table("periods")
            .map(|t| {
                t.rows
                    .iter()
                    .filter(|r| matches!(&r[0], Cell::Text(k) if k == "plateau"))
                    .filter_map(|r| match &r[1] {
                        Cell::Text(s) => chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d")
                            .ok()
                            .map(|d| (d - cohortpress_validation::day0()).num_days()),
                        _ => None,
                    })
                    .collect()
            })
            .unwrap_or_default();
        let est = starts.first().copied();
        let last_obs = p.obs.iter().map(|o| o.day).max().unwrap_or(0);
        let observed_to_end = last_obs + 28 > days - 1;
        let observable = |t: usize| p.withdrew.is_none_or(|w| w >= t + 28);
        let h = p.weighing.name();
        let a = p.archetype.name();
        match onset.filter(|t| observable(*t)) {
            Some(t) => {
                let err = est.map(|e| e - t as i64);
                by_habit.entry(h).or_default().push(err);
                by_arch.entry(a).or_default().push(err);
                if verbose {
                    println!("{i:3} {h:>16} {a:>20} true {t:3} est {starts:?}");
                }
            }
            None if observed_to_end && p.withdrew.is_none() => {
                let f = falses.entry(h).or_default();
                f.1 += 1;
                if est.is_some() {
                    f.0 += 1;
                    if verbose {
                        println!("{i:3} {h:>16} {a:>20} FALSE est {starts:?}");
                    }
                }
            }
            None => {}
        }
    }
    let show = |name: &str, v: &Vec<Option<i64>>| {
        let n = v.len();
        let miss = v.iter().filter(|e| e.is_none()).count();
        let hit = v
            .iter()
            .filter(|e| e.is_some_and(|e| e.abs() <= 14))
            .count();
        let early = v.iter().filter(|e| e.is_some_and(|e| e < -14)).count();
        let late = v.iter().filter(|e| e.is_some_and(|e| e > 14)).count();
        let mut errs: Vec<i64> = v.iter().flatten().copied().collect();
        errs.sort();
        let q = |f: f64| {
            errs.get(((errs.len() as f64 - 1.0) * f).round() as usize)
                .copied()
        };
        println!(
            "{name:>20}: n {n:3} hit {:5.1} % | early {early:2} late {late:2} miss {miss:2} | err q10 {:?} q50 {:?} q90 {:?}",
            100.0 * hit as f64 / n.max(1) as f64,
            q(0.1),
            q(0.5),
            q(0.9)
        );
    };
    let all: Vec<Option<i64>> = by_habit.values().flatten().copied().collect();
    println!("mode {mode}, seed {seed}");
    show("ALL", &all);
    for (k, v) in &by_habit {
        show(k, v);
    }
    for (k, v) in &by_arch {
        show(k, v);
    }
    let (f, n) = falses.values().fold((0, 0), |a, b| (a.0 + b.0, a.1 + b.1));
    println!("false plateaus {f}/{n} {:?}", falses);
    let _ = (Archetype::ALL, Weighing::ALL);
}

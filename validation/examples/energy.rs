//! Energy error decomposition (development aid): for each person recorded to the end, the
//! error of the implied intake split into the baseline requirement EI₀ and the intake change,
//! the expenditure error split into the implied intake and the storage term, and what the
//! expenditure and window under-reporting errors would be with EI₀ known. Medians (error /
//! absolute error) overall, per archetype and per weighing habit.
//!
//! `cargo run --release -p cohortpress-validation --example energy [SEED]`

use cohortpress_metric_api::Targets;
use cohortpress_validation::{participant_data, run_modules, truth};

fn median(mut x: Vec<f64>) -> f64 {
    if x.is_empty() {
        return f64::NAN;
    }
    x.sort_by(|a, b| a.total_cmp(b));
    x[x.len() / 2]
}

/// Mifflin–St Jeor (Mifflin et al. 1990, Am J Clin Nutr 51:241), as the module computes it.
fn mifflin(male: bool, kg: f64, cm: f64, age: f64) -> f64 {
    10.0 * kg + 6.25 * cm - 5.0 * age + if male { 5.0 } else { -161.0 }
}

const NAMES: [&str; 8] = [
    "implied",
    "EI0",
    "change",
    "TDEE",
    "storage",
    "UR window",
    "TDEE|EI0",
    "UR|EI0",
];

fn main() {
    let seed: u64 = std::env::args()
        .nth(1)
        .and_then(|s| s.parse().ok())
        .unwrap_or(20_261_202);
    let days = 180;
    let end = days - 1;
    let mut rows: Vec<(&str, &str, [f64; 8])> = vec![];
    for i in 0..300 {
        let p = truth::simulate(seed, i, days);
        let data = participant_data(&p, &Targets::default());
        let (trend, energy) = run_modules(&data, days, end);
        if !p.obs.iter().any(|o| o.day + 28 > end) {
            continue;
        }
        let (Some(imp), Some(tdee), Some(pal), Some(bw0)) = (
            energy.scalar("implied_intake_kcal_per_day"),
            energy.scalar("tdee_kcal_per_day"),
            energy.scalar("pal_estimate"),
            trend
                .series("weight_trend")
                .and_then(|s| s.points.first().map(|p| p.value)),
        ) else {
            continue;
        };
        let height = (p.height_cm * 10.0).round() / 10.0;
        let ei0_est = pal * mifflin(p.male, bw0, height, p.age.floor());
        let window = |v: &[f64]| v[end - 27..=end].iter().sum::<f64>() / 28.0;
        let logs: Vec<f64> = p
            .logs
            .iter()
            .filter(|(d, _)| d + 28 > end)
            .map(|x| x.1)
            .collect();
        let lw = if logs.len() >= 4 {
            logs.iter().sum::<f64>() / logs.len() as f64
        } else {
            f64::NAN
        };
        let e_imp = imp - window(&p.intake);
        let e_ei0 = ei0_est - p.rmr0 * p.pal;
        let e_tdee = tdee - window(&p.tee);
        let ur = |i: f64| 100.0 * (1.0 - lw / i) - 100.0 * p.underreport;
        rows.push((
            p.archetype.name(),
            p.weighing.name(),
            [
                e_imp,
                e_ei0,
                e_imp - e_ei0,
                e_tdee,
                e_tdee - e_imp,
                ur(imp),
                e_tdee - e_ei0,
                ur(imp - e_ei0),
            ],
        ));
    }
    let mut groups: Vec<&str> = rows.iter().flat_map(|r| [r.0, r.1]).collect();
    groups.sort_unstable();
    groups.dedup();
    print!("{:<20} {:>4}", "group", "n");
    for n in NAMES {
        print!(" {n:>15}");
    }
    println!();
    for g in std::iter::once("all").chain(groups) {
        let sel: Vec<&[f64; 8]> = rows
            .iter()
            .filter(|r| g == "all" || r.0 == g || r.1 == g)
            .map(|r| &r.2)
            .collect();
        print!("{g:<20} {:>4}", sel.len());
        for k in 0..NAMES.len() {
            let v: Vec<f64> = sel.iter().map(|r| r[k]).filter(|x| x.is_finite()).collect();
            let abs = v.iter().map(|x| x.abs()).collect();
            print!(" {:>7.1}/{:>7.1}", median(v), median(abs));
        }
        println!();
    }
}

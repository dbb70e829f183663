//! Plateau-cause diagnostics (development aid).
use cohortpress_metric_api::{Cell, Targets};
use cohortpress_validation::{participant_data, run_modules, true_plateau_onset, truth};

fn main() {
    let days = 180;
    for i in 0..300 {
        let p = truth::simulate(20_261_202, i, days);
        let Some(on) = true_plateau_onset(&p.tissue, &p.bw) else {
            continue;
        };
        let d = participant_data(&p, &Targets::default());
        let (_, en) = run_modules(&d, days, days - 1);
        let t = en.table("plateau_assessment").unwrap();
        let early: f64 = p.intake[7..35].iter().sum::<f64>() / 28.0;
        let during: f64 = p.intake[on..(on + 28).min(days)].iter().sum::<f64>() / 28.0;
        for r in &t.rows {
            let f = |c: &Cell| match c {
                Cell::Text(s) => s.clone(),
                Cell::Number(x) => format!("{x:.0}"),
                Cell::Empty => "-".into(),
            };
            println!(
                "{i:3} {:18} {:10} on {on} rise {:.0} | {} {} early {} during {} chg {} [{}, {}] {}",
                p.archetype.name(),
                p.weighing.name(),
                during - early,
                f(&r[0]),
                f(&r[6]),
                f(&r[4]),
                f(&r[5]),
                f(&r[8]),
                f(&r[9]),
                f(&r[10]),
                f(&r[3])
            );
        }
    }
}

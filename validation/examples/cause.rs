//! Plateau-cause diagnostics (development aid).
use cohortpress_metric_api::Targets;
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_energy::view::EnergyView;
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
        let en = EnergyView::from_output(&en).unwrap();
        let early: f64 = p.intake[7..35].iter().sum::<f64>() / 28.0;
        let during: f64 = p.intake[on..(on + 28).min(days)].iter().sum::<f64>() / 28.0;
        for r in &en.plateau_assessment {
            let f = |x: Option<f64>| x.map_or("-".into(), |x| format!("{x:.0}"));
            println!(
                "{i:3} {:18} {:10} on {on} rise {:.0} | {} {} early {} during {} chg {} [{}, {}] {}",
                p.archetype.name(),
                p.weighing.name(),
                during - early,
                r.start,
                r.classification,
                f(r.implied_intake_before_kcal_per_day),
                f(r.implied_intake_during_kcal_per_day),
                f(r.intake_change_kcal_per_day),
                f(r.intake_change_lower_kcal_per_day),
                f(r.intake_change_upper_kcal_per_day),
                f(r.expected_slope_kg_per_week)
            );
        }
    }
}

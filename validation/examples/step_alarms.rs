//! Weigh-in steps called on honest records (development aid): the simulator puts no step in
//! anyone's weigh-ins (its scale readings are true weight plus rhythm, correlated scatter,
//! clothing at the clinic and rare gross errors), so every `weigh_in_steps` row here is a false
//! alarm, and every such alarm moves a person's earlier weigh-ins by five kilograms or more.
//!
//! `cargo run --release -p cohortpress-validation --example step_alarms -- [SEEDS...]`
//! (default: 20261202 7 99; 300 people × 180 days each), as simulated and with the stress
//! runs' noisiest scales (`Scenario::STRESS[5]`: scatter 1.5×, φ up to 0.9, clinic clothing
//! 0–3 kg). `-v` lists each alarm.
use cohortpress_metric_api::Targets;
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_trend::view::TrendView;
use cohortpress_validation::{participant_data, run_modules, truth};

fn main() {
    let args: Vec<String> = std::env::args().skip(1).collect();
    let verbose = args.iter().any(|a| a == "-v");
    let mut seeds: Vec<u64> = args.iter().filter_map(|a| a.parse().ok()).collect();
    if seeds.is_empty() {
        seeds = vec![20_261_202, 7, 99];
    }
    let days = 180;
    for sc in [truth::Scenario::BASE, truth::Scenario::STRESS[5]] {
        let (mut people, mut alarmed, mut rows) = (0, 0, 0);
        for &seed in &seeds {
            for i in 0..300 {
                let p = truth::simulate_in(seed, i, days, &sc);
                let d = participant_data(&p, &Targets::default());
                let (tr, _) = run_modules(&d, days, days - 1);
                let Ok(tr) = TrendView::from_output(&tr) else {
                    continue;
                };
                people += 1;
                if !tr.weigh_in_steps.is_empty() {
                    alarmed += 1;
                    rows += tr.weigh_in_steps.len();
                    if verbose {
                        println!(
                            "seed {seed} person {i:3} {:16} {:?}",
                            p.weighing.name(),
                            tr.weigh_in_steps
                        );
                    }
                }
            }
        }
        println!(
            "{}: people {people}, with a step called {alarmed}, steps {rows}",
            sc.name
        );
    }
}

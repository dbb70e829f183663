//! Plateau diagnostics (development aid).
use cohortpress_metric_api::Targets;
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_trend::view::TrendView;
use cohortpress_validation::{participant_data, run_modules, true_plateau_onset, truth};

fn main() {
    let days = 180;
    for i in 0..300 {
        let p = truth::simulate(20_261_202, i, days);
        let on = true_plateau_onset(&p.tissue, &p.bw);
        let d = participant_data(&p, &Targets::default());
        let (tr, _en) = run_modules(&d, days, days - 1);
        let day = |d: chrono::NaiveDate| (d - cohortpress_validation::day0()).num_days();
        let per: Vec<String> = TrendView::from_output(&tr)
            .unwrap()
            .periods
            .iter()
            .map(|r| {
                let c = r.confidence.map_or("-".into(), |x| format!("{x:.2}"));
                format!("{}:{}-{} c{c}", r.kind, day(r.start), day(r.end))
            })
            .collect();
        if on.is_some() || per.iter().any(|x| x.starts_with("plateau")) {
            println!(
                "{i:3} {:18} {:10} true {:?} w{:?} | {}",
                p.archetype.name(),
                p.weighing.name(),
                on,
                p.withdrew,
                per.join(" ")
            );
        }
    }
}

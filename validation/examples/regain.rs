//! Regain diagnostics (development aid).
use cohortpress_metric_api::Targets;
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_trend::view::TrendView;
use cohortpress_validation::{participant_data, run_modules, truth};

fn main() {
    let days = 180;
    for i in 0..300 {
        let p = truth::simulate(20_261_202, i, days);
        let n = p.tissue.len();
        let min = p.tissue.iter().copied().fold(f64::INFINITY, f64::min);
        let rise = p.tissue[n - 1] - min;
        if rise < 0.01 * p.bw[0] || p.withdrew.is_some() {
            continue;
        }
        let d = participant_data(&p, &Targets::default());
        let (tr, _) = run_modules(&d, days, days - 1);
        let tr = TrendView::from_output(&tr).unwrap();
        let r = tr.regain_kg;
        println!(
            "{i:3} {:18} {:10} true rise {:.1} ({:.1}%) lost {:.1}% | est {:.1} [{:.1},{:.1}] conf {:.2} {:?} status {:?}",
            p.archetype.name(),
            p.weighing.name(),
            rise,
            100.0 * rise / p.bw[0],
            100.0 * (p.tissue[0] - min) / p.bw[0],
            r.value.unwrap_or(f64::NAN),
            r.lower.unwrap_or(f64::NAN),
            r.upper.unwrap_or(f64::NAN),
            tr.regain_confidence.unwrap_or(f64::NAN),
            tr.regain_verdict,
            tr.status,
        );
    }
}

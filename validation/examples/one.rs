//! One person's trend against the truth (development aid).
use cohortpress_metric_api::Targets;
use cohortpress_validation::{participant_data, run_modules, truth};

fn main() {
    let i: usize = std::env::args().nth(1).unwrap().parse().unwrap();
    let days = 180;
    let p = truth::simulate(20_261_202, i, days);
    let d = participant_data(&p, &Targets::default());
    let (tr, _) = run_modules(&d, days, days - 1);
    let lv = &tr.series("weight_trend").unwrap().points;
    println!(
        "bw0 {:.1} obs {} status {:?} intake0 {:.0}",
        p.bw[0],
        p.obs.len(),
        tr.text("status"),
        p.intake[0]
    );
    for t in (14..166).step_by(7) {
        let tm = (p.bw[t + 14] - p.bw[t - 14]) / 28.0 * 7.0;
        let em = (lv[t + 14].value - lv[t - 14].value) / 28.0 * 7.0;
        println!(
            "{t:3} true {:.1} slope {tm:+.2}  est {:.1} slope {em:+.2}  band {:.2} intake {:.0}",
            p.bw[t],
            lv[t].value,
            0.0025 * p.bw[t],
            p.intake[t - 7..t + 7].iter().sum::<f64>() / 14.0
        );
    }
}

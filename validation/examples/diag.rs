//! Per-person diagnostics for one archetype (development aid).
use cohortpress_metric_api::Targets;
use cohortpress_validation::{participant_data, run_modules, truth};

fn main() {
    let want = std::env::args().nth(1).unwrap_or_else(|| "little".into());
    let days = 180;
    for i in 0..300 {
        let p = truth::simulate(20_261_202, i, days);
        if !p.archetype.name().contains(want.as_str()) {
            continue;
        }
        let d = participant_data(&p, &Targets::default());
        let (tr, en) = run_modules(&d, days, days - 1);
        let ti: f64 = p.intake[152..180].iter().sum::<f64>() / 28.0;
        let tt: f64 = p.tee[152..180].iter().sum::<f64>() / 28.0;
        let rmr = en.scalar("rmr_kcal_per_day").unwrap_or(f64::NAN);
        let s = en.scalar_full("implied_intake_kcal_per_day").unwrap();
        let mif = 10.0 * p.bw[0] + 6.25 * p.height_cm - 5.0 * p.age.floor()
            + if p.male { 5.0 } else { -161.0 };
        let est_ei0 = en.scalar("pal_estimate").unwrap_or(f64::NAN) * mif;
        let true_ei0 = p.pal * p.rmr0;
        let lm: f64 = p.logs.iter().map(|l| l.1).sum::<f64>() / p.logs.len() as f64;
        let im: f64 = p.intake[..p.logs.last().map_or(1, |l| l.0 + 1)]
            .iter()
            .sum::<f64>()
            / p.logs.last().map_or(1, |l| l.0 + 1) as f64;
        let last = p.logs.last().map_or(1, |l| l.0 + 1);
        eprintln!(
            "TRUTH dEI {:.0} span intake {:.0} ei0 {:.0}",
            p.intake[..180].iter().sum::<f64>() / 180.0 - true_ei0,
            p.intake[..180].iter().sum::<f64>() / 180.0,
            true_ei0
        );
        let _ = last;
        println!(
            "LOG {:.0} PRIOR {:.0}",
            lm / 0.8 - im,
            1.55 * mif - true_ei0
        );
        println!(
            "ERR {:.0} EI0err {:.0} dyn {:.0}",
            s.value.unwrap_or(f64::NAN) - ti,
            est_ei0 - true_ei0,
            s.value.unwrap_or(f64::NAN) - ti - (est_ei0 - true_ei0)
        );
        println!(
            "{i:3} {:10} pal {:.2} est {:.2} rmr0 {:.0} estrmr {:.0} | intake {:.0} est {:.0} [{:.0},{:.0}] | tee {:.0} est {:.0} | u {:.0} est {:.1} | {} {:?}",
            p.weighing.name(),
            p.pal,
            en.scalar("pal_estimate").unwrap_or(f64::NAN),
            p.rmr0,
            rmr,
            ti,
            s.value.unwrap_or(f64::NAN),
            s.lower.unwrap_or(f64::NAN),
            s.upper.unwrap_or(f64::NAN),
            tt,
            en.scalar("tdee_kcal_per_day").unwrap_or(f64::NAN),
            100.0 * p.underreport,
            en.scalar("underreporting_percent").unwrap_or(f64::NAN),
            tr.text("status").unwrap_or(""),
            cohortpress_validation::true_plateau_onset(&p.tissue, &p.bw),
        );
    }
}

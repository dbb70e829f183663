//! Plateau diagnostics (development aid).
use cohortpress_metric_api::{Cell, Targets};
use cohortpress_validation::{participant_data, run_modules, true_plateau_onset, truth};

fn main() {
    let days = 180;
    for i in 0..300 {
        let p = truth::simulate(20_261_202, i, days);
        let on = true_plateau_onset(&p.tissue, &p.bw);
        let d = participant_data(&p, &Targets::default());
        let (tr, _en) = run_modules(&d, days, days - 1);
        let t = tr.table("periods").unwrap();
        let per: Vec<String> = t
            .rows
            .iter()
            .map(|r| {
                let f = |c: &Cell| match c {
                    Cell::Text(s) => s.clone(),
                    Cell::Number(x) => format!("{x:.2}"),
                    Cell::Empty => "-".into(),
                };
                let start = match &r[1] {
                    Cell::Text(s) => (chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
                        - cohortpress_validation::day0())
                    .num_days(),
                    _ => -1,
                };
                let end = match &r[2] {
                    Cell::Text(s) => (chrono::NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
                        - cohortpress_validation::day0())
                    .num_days(),
                    _ => -1,
                };
                format!("{}:{}-{} c{}", f(&r[0]), start, end, f(&r[9]))
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

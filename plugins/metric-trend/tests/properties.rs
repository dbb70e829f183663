//! Property tests on synthetic weigh-ins made by a fixed-seed generator written here, so every
//! run sees the same data. The truths (slopes, plateau) are the generator's own parameters.

use chrono::NaiveDate;
use cohortpress_metric_api::units::{Length, Mass};
use cohortpress_metric_api::{
    Cell, FlagSeverity, IntakeDay, MetricModule, ModuleContext, ModuleOutput, ParticipantData,
    Period, Profile, ProgramInfo, Sex, Targets, UnitSystem, WeighIn,
};
use cohortpress_metric_trend::TrendModule;
use std::collections::BTreeMap;

/// SplitMix64 (Steele, Lea & Flood 2014, from memory) with Box–Muller normals: small, fixed-seed, enough for
/// test data.
struct Rng(u64);

impl Rng {
    fn next_u64(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    /// Uniform in (0, 1).
    fn uniform(&mut self) -> f64 {
        ((self.next_u64() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos()
    }
}

fn day0() -> NaiveDate {
    NaiveDate::from_ymd_opt(2027, 3, 1).unwrap()
}

fn day(i: i64) -> NaiveDate {
    day0() + chrono::Duration::days(i)
}

fn participant(weights: &[(i64, f64)]) -> ParticipantData {
    ParticipantData {
        profile: Profile {
            id: "T-001".into(),
            name: None,
            sex: Some(Sex::Female),
            birth_date: None,
            age_years: 45.0,
            height: Length::from_cm(168.0),
            enrolled: day0(),
            withdrew: None,
            withdrawal_reason: Default::default(),
            groups: BTreeMap::new(),
            body_fat_percent: None,
            targets: Targets::default(),
            flags: vec![],
        },
        weights: weights
            .iter()
            .map(|&(d, kg)| WeighIn {
                date: day(d),
                time: None,
                weight: Mass::from_kg(kg),
                source: None,
            })
            .collect(),
        intake: vec![],
        activity: vec![],
        sessions: vec![],
        labs: vec![],
    }
}

fn run(weights: &[(i64, f64)], to: i64) -> ModuleOutput {
    run_data(&participant(weights), to)
}

fn run_data(data: &ParticipantData, to: i64) -> ModuleOutput {
    run_period(data, 0, to)
}

/// The module on `data` for the period of days `from`..=`to`.
fn run_period(data: &ParticipantData, from: i64, to: i64) -> ModuleOutput {
    let module = TrendModule;
    let settings = module
        .spec()
        .resolve_settings(&serde_json::Value::Null)
        .unwrap();
    let ctx = ModuleContext {
        program: ProgramInfo {
            id: "demo".into(),
            title: "Demo".into(),
            start: day0(),
            end: day(364),
            units: UnitSystem::Metric,
            targets: Targets::default(),
        },
        period: Period {
            from: day(from),
            to: day(to),
        },
        as_of: day(to),
        settings,
        earlier: BTreeMap::new(),
    };
    module.compute(&ctx, data).unwrap()
}

fn kinds(out: &ModuleOutput) -> Vec<(String, String, String)> {
    let t = out.table("periods").unwrap();
    t.rows
        .iter()
        .map(|r| match (&r[0], &r[1], &r[2]) {
            (Cell::Text(k), Cell::Text(s), Cell::Text(e)) => (k.clone(), s.clone(), e.clone()),
            other => panic!("unexpected cells {other:?}"),
        })
        .collect()
}

/// Linear loss at `kg_per_week` from 95 kg, noise SD `sd`, a weigh-in on each day with
/// probability `p` (irregular spacing), over `days` days.
fn linear(seed: u64, days: i64, kg_per_week: f64, sd: f64, p: f64) -> Vec<(i64, f64)> {
    let mut rng = Rng(seed);
    (0..days)
        .filter_map(|d| {
            let keep = rng.uniform() < p || d == 0;
            let y = 95.0 + kg_per_week / 7.0 * d as f64 + sd * rng.normal();
            keep.then_some((d, y))
        })
        .collect()
}

#[test]
fn known_linear_loss_is_recovered_within_its_interval() {
    // Truth: −0.5 kg/wk, σ = 0.6 kg, about 4 weigh-ins a week at irregular days, 16 weeks.
    for seed in [1u64, 2, 3] {
        let w = linear(seed, 112, -0.5, 0.6, 0.55);
        let out = run(&w, 111);
        let s = out.scalar_full("slope_kg_per_week").unwrap();
        let (v, lo, hi) = (s.value.unwrap(), s.lower.unwrap(), s.upper.unwrap());
        assert!(
            lo <= -0.5 && -0.5 <= hi,
            "seed {seed}: [{lo}, {hi}] misses −0.5 (estimate {v})"
        );
        assert!(
            hi - lo < 0.6,
            "seed {seed}: interval [{lo}, {hi}] is uselessly wide"
        );
        let ts = out.scalar_full("theil_sen_slope_kg_per_week").unwrap();
        assert!(
            ts.lower.unwrap() <= -0.5 && -0.5 <= ts.upper.unwrap(),
            "seed {seed}: Theil–Sen {ts:?}"
        );
        let sd = out.scalar("noise_sd_kg").unwrap();
        assert!((0.45..=0.8).contains(&sd), "seed {seed}: noise SD {sd}");
        // The trend on the last day is within its band of the true level.
        let cur = out.scalar_full("current_weight_kg").unwrap();
        let last_day = w.last().unwrap().0 as f64;
        let truth = 95.0 - 0.5 / 7.0 * last_day;
        assert!(
            cur.lower.unwrap() <= truth && truth <= cur.upper.unwrap(),
            "seed {seed}: {cur:?} vs {truth}"
        );
        assert_eq!(out.text("status"), Some("losing"), "seed {seed}");
        assert_eq!(out.scalar("weigh_ins_used"), Some(w.len() as f64));
        assert_eq!(out.scalar("outliers_ignored"), Some(0.0));
        // A steady loss gives loss periods and no plateau.
        assert!(
            kinds(&out)
                .iter()
                .all(|k| k.0 != "plateau" && k.0 != "regain"),
            "seed {seed}: {:?}",
            kinds(&out)
        );
        assert!(kinds(&out).iter().any(|k| k.0 == "loss"));
    }
}

#[test]
fn series_cover_every_day_from_first_to_last_weigh_in() {
    let w = linear(7, 60, -0.5, 0.6, 0.5);
    let out = run(&w, 70);
    let trend = out.series("weight_trend").unwrap();
    let (first, last) = (w[0].0, w.last().unwrap().0);
    assert_eq!(trend.points.len() as i64, last - first + 1);
    assert_eq!(trend.points[0].date, day(first));
    assert_eq!(trend.points.last().unwrap().date, day(last));
    assert_eq!(trend.step, "daily");
    for p in &trend.points {
        assert!(p.lower.unwrap() < p.value && p.value < p.upper.unwrap());
    }
    assert_eq!(
        out.series("weight_slope").unwrap().points.len(),
        trend.points.len()
    );
    assert_eq!(out.series("weigh_ins").unwrap().points.len(), w.len());
    assert_eq!(
        out.scalar("days_since_last_weigh_in"),
        Some((70 - last) as f64)
    );
}

#[test]
fn flat_weeks_after_a_six_percent_loss_are_a_plateau() {
    // 100 kg, 6 % lost linearly over 10 weeks, then flat for 6 weeks; daily weigh-ins, σ 0.5 kg.
    let mut rng = Rng(42);
    let w: Vec<(i64, f64)> = (0..112)
        .map(|d| {
            let truth = if d < 70 {
                100.0 - 6.0 * d as f64 / 70.0
            } else {
                94.0
            };
            (d, truth + 0.5 * rng.normal())
        })
        .collect();
    let out = run(&w, 111);
    assert_eq!(out.text("status"), Some("plateau"));
    let k = kinds(&out);
    let plateau = k
        .iter()
        .find(|k| k.0 == "plateau")
        .unwrap_or_else(|| panic!("no plateau in {k:?}"));
    assert_eq!(plateau.2, "2027-06-20"); // day 111, the last day
    // It starts after the loss ended (day 70 = 2027-05-10), not during the loss.
    assert!(
        plateau.1.as_str() >= "2027-05-03",
        "plateau starts {}",
        plateau.1
    );
    assert!(
        k.iter().any(|k| k.0 == "loss" && k.1 == "2027-03-01"),
        "{k:?}"
    );
    let s = out.scalar_full("slope_kg_per_week").unwrap();
    assert!(
        s.lower.unwrap() > -0.235 && s.upper.unwrap() < 0.235,
        "{s:?}"
    );
}

#[test]
fn flat_weight_without_a_prior_loss_is_stable_not_plateau() {
    let mut rng = Rng(5);
    let w: Vec<(i64, f64)> = (0..56).map(|d| (d, 88.0 + 0.5 * rng.normal())).collect();
    let out = run(&w, 55);
    assert_eq!(out.text("status"), Some("stable"));
    assert!(
        kinds(&out).iter().all(|k| k.0 != "plateau"),
        "{:?}",
        kinds(&out)
    );
}

#[test]
fn regain_after_a_loss_is_a_regain_period() {
    // 8 weeks losing 0.8 kg/wk from 100 kg, then 6 weeks gaining 0.6 kg/wk; daily, σ 0.5.
    let mut rng = Rng(11);
    let w: Vec<(i64, f64)> = (0..98)
        .map(|d| {
            let x = d as f64;
            let truth = if d < 56 {
                100.0 - 0.8 / 7.0 * x
            } else {
                93.6 + 0.6 / 7.0 * (x - 56.0)
            };
            (d, truth + 0.5 * rng.normal())
        })
        .collect();
    let out = run(&w, 97);
    assert_eq!(out.text("status"), Some("regaining"));
    assert!(
        kinds(&out).iter().any(|k| k.0 == "regain"),
        "{:?}",
        kinds(&out)
    );
}

#[test]
fn sparse_weigh_ins_give_insufficient_data() {
    // One weigh-in every 10 days for 3 months: never 8 in a 4-week window.
    let mut rng = Rng(3);
    let w: Vec<(i64, f64)> = (0..10)
        .map(|k| (10 * k, 92.0 - 0.05 * k as f64 + 0.6 * rng.normal()))
        .collect();
    let out = run(&w, 90);
    assert_eq!(out.text("status"), Some("insufficient_data"));
    let k = kinds(&out);
    assert!(
        !k.is_empty() && k.iter().all(|k| k.0 == "insufficient_data"),
        "{k:?}"
    );
    // A trend is still drawn, only no verdict is given.
    assert_eq!(out.series("weight_trend").unwrap().points.len(), 91);
    assert!(out.flags.iter().all(|f| f.code != "insufficient_data"));
}

#[test]
fn a_long_silence_before_the_period_end_gives_no_verdict() {
    let w = linear(9, 60, -0.5, 0.6, 0.8);
    let out = run(&w, 59 + 45);
    assert_eq!(out.text("status"), Some("insufficient_data"));
    assert_eq!(out.scalar("slope_kg_per_week"), None);
    assert!(out.scalar("current_weight_kg").is_some());
}

/// A plateau that was still going at the last weigh-in is no verdict on the period's end when
/// that weigh-in lies more than a window before it: the demo program (150, September), SG-019,
/// last weighed 25 Aug, read "Your weight has held steady over the last four weeks (a plateau)"
/// and the group report counted it "on a plateau at the end of the period".
#[test]
fn a_plateau_that_ended_with_the_weigh_ins_weeks_before_the_period_end_is_no_verdict() {
    let mut rng = Rng(42);
    let w: Vec<(i64, f64)> = (0..112)
        .map(|d| {
            let truth = if d < 70 {
                100.0 - 6.0 * d as f64 / 70.0
            } else {
                94.0
            };
            (d, truth + 0.5 * rng.normal())
        })
        .collect();
    // The same weigh-ins read up to their last day are a plateau (see above) ...
    assert_eq!(run(&w, 111).text("status"), Some("plateau"));
    // ... but 36 days of silence later (as SG-019) the last four weeks hold no weigh-in.
    let out = run(&w, 111 + 36);
    assert_eq!(out.text("status"), Some("insufficient_data"));
    assert_eq!(out.scalar("days_since_last_weigh_in"), Some(36.0));
    // The plateau itself stays in the periods table, dated to the last weigh-in.
    assert!(
        kinds(&out)
            .iter()
            .any(|k| k.0 == "plateau" && k.2 == "2027-06-20"),
        "{:?}",
        kinds(&out)
    );
    // Exactly four weeks of silence: the window holds no weigh-in either.
    assert_eq!(run(&w, 111 + 28).text("status"), Some("insufficient_data"));
}

#[test]
fn a_single_huge_outlier_barely_moves_the_trend() {
    let clean = linear(21, 84, -0.5, 0.6, 0.7);
    let mut dirty = clean.clone();
    let mid = dirty.len() / 2;
    dirty[mid].1 += 15.0; // e.g. weighed holding a child
    let a = run(&clean, 83);
    let b = run(&dirty, 83);
    assert_eq!(b.scalar("outliers_ignored"), Some(1.0));
    assert_eq!(a.scalar("outliers_ignored"), Some(0.0));
    assert_eq!(b.scalar("weigh_ins_used"), Some((clean.len() - 1) as f64));
    let (ta, tb) = (
        a.series("weight_trend").unwrap(),
        b.series("weight_trend").unwrap(),
    );
    let worst = ta
        .points
        .iter()
        .zip(&tb.points)
        .map(|(p, q)| (p.value - q.value).abs())
        .fold(0.0, f64::max);
    assert!(worst <= 0.2, "trend moved by {worst} kg");
    assert!(
        b.series("weigh_ins")
            .unwrap()
            .points
            .iter()
            .all(|p| p.value < 100.0)
    );
}

/// For someone who left, `days_since_last_weigh_in` runs to the period's end, past the day
/// they left (adherence's `days_since_last_record` stops there: sample program, September
/// 2026, SG-018 read 67 and 1 with nothing to say why); the descriptor says so and names the
/// other column.
#[test]
fn days_since_the_last_weigh_in_run_to_the_period_end_also_after_leaving_and_say_so() {
    let mut data = participant(&[(0, 90.0), (5, 89.8), (10, 89.6)]);
    data.profile.withdrew = Some(day(12));
    let out = run_data(&data, 40);
    assert_eq!(out.scalar("days_since_last_weigh_in"), Some(30.0));
    let spec = TrendModule.spec();
    let described = &spec
        .outputs
        .iter()
        .find(|o| o.name == "days_since_last_weigh_in")
        .unwrap()
        .description;
    for words in [
        "to the period's end",
        "follow-up weigh-ins after leaving count",
        "the days run on past the day they left",
        "adherence.days_since_last_record, which stops at that day",
    ] {
        assert!(described.contains(words), "{described}");
    }
}

#[test]
fn data_after_the_period_end_are_not_used() {
    let w = linear(4, 100, -0.5, 0.6, 0.8);
    let cut: Vec<(i64, f64)> = w.iter().copied().filter(|p| p.0 <= 60).collect();
    let a = run(&w, 60);
    let b = run(&cut, 60);
    assert_eq!(a, b);
    assert!(
        a.series("weight_trend")
            .unwrap()
            .points
            .last()
            .unwrap()
            .date
            <= day(60)
    );
}

#[test]
fn several_weigh_ins_on_one_day_are_averaged() {
    let mut w = linear(8, 56, -0.5, 0.6, 0.8);
    let base = run(&w, 55);
    // Split each weigh-in into two readings 0.4 kg apart with the same mean.
    let split: Vec<(i64, f64)> = w
        .drain(..)
        .flat_map(|(d, y)| [(d, y - 0.2), (d, y + 0.2)])
        .collect();
    let two = run(&split, 55);
    let (ta, tb) = (
        base.series("weight_trend").unwrap(),
        two.series("weight_trend").unwrap(),
    );
    for (p, q) in ta.points.iter().zip(&tb.points) {
        assert!((p.value - q.value).abs() < 1e-9);
    }
    assert_eq!(
        two.scalar("weigh_ins_used"),
        Some(2.0 * base.scalar("weigh_ins_used").unwrap())
    );
}

#[test]
fn empty_and_tiny_series_give_missing_values_not_a_panic() {
    for w in [
        vec![],
        vec![(0, 90.0)],
        vec![(0, 90.0), (3, 89.5)],
        vec![(0, 90.0), (0, 89.0), (0, 90.5)],
    ] {
        let out = run(&w, 30);
        assert_eq!(out.scalar("current_weight_kg"), None);
        assert_eq!(out.scalar("slope_kg_per_week"), None);
        assert_eq!(out.scalar("theil_sen_slope_kg_per_week"), None);
        assert_eq!(out.scalar("noise_sd_kg"), None);
        assert_eq!(out.scalar("weigh_ins_used"), Some(w.len() as f64));
        assert_eq!(out.text("status"), Some("insufficient_data"));
        assert!(out.flags.iter().any(|f| f.code == "insufficient_data"));
        assert!(out.series("weight_trend").unwrap().points.is_empty());
        assert!(out.table("periods").unwrap().rows.is_empty());
    }
    assert_eq!(run(&[], 30).scalar("days_since_last_weigh_in"), None);
}

#[test]
fn three_weigh_ins_give_a_trend() {
    let out = run(&[(0, 90.0), (5, 89.6), (9, 89.5)], 9);
    assert!(out.scalar("current_weight_kg").is_some());
    assert_eq!(out.series("weight_trend").unwrap().points.len(), 10);
    assert!(out.flags.is_empty());
}

#[test]
fn spec_settings_have_defaults_and_ranges() {
    let spec = TrendModule.spec();
    assert_eq!(spec.id, "trend");
    assert!(spec.requires.is_empty());
    let r = spec.resolve_settings(&serde_json::Value::Null).unwrap();
    assert_eq!(r["plateau_window_days"], 28);
    assert_eq!(r["min_weigh_ins"], 8);
    assert_eq!(r["plateau_band_percent_per_week"], 0.25);
    assert_eq!(r["min_prior_loss_percent"], 3.0);
    assert_eq!(r["outlier_z"], 4.0);
    assert!(
        spec.resolve_settings(&serde_json::json!({"plateau_window_days": 3}))
            .is_err()
    );
}

/// Runs the module on home weigh-ins plus `clinic` readings with the given source.
fn run_with_clinic(
    home: &[(i64, f64)],
    clinic: &[(i64, f64)],
    source: Option<&str>,
    to: i64,
) -> ModuleOutput {
    let module = TrendModule;
    let settings = module
        .spec()
        .resolve_settings(&serde_json::Value::Null)
        .unwrap();
    let mut data = participant(home);
    data.weights.extend(clinic.iter().map(|&(d, kg)| WeighIn {
        date: day(d),
        time: None,
        weight: Mass::from_kg(kg),
        source: source.map(str::to_string),
    }));
    data.weights.sort_by_key(|w| w.date);
    let ctx = ModuleContext {
        program: ProgramInfo {
            id: "demo".into(),
            title: "Demo".into(),
            start: day0(),
            end: day(364),
            units: UnitSystem::Metric,
            targets: Targets::default(),
        },
        period: Period {
            from: day0(),
            to: day(to),
        },
        as_of: day(to),
        settings,
        earlier: BTreeMap::new(),
    };
    module.compute(&ctx, &data).unwrap()
}

#[test]
fn clothed_clinic_weigh_ins_get_their_own_offset() {
    // Home scale: −0.5 kg/wk from 95 kg, σ 0.5 kg, about 4 days a week, 16 weeks. Clinic:
    // every two weeks, clothed (+1.2 kg), in the last week twice.
    let home = linear(31, 112, -0.5, 0.5, 0.55);
    let mut rng = Rng(32);
    let truth = |d: i64| 95.0 - 0.5 / 7.0 * d as f64;
    let clinic: Vec<(i64, f64)> = (3..112)
        .step_by(14)
        .chain([108, 110])
        .map(|d| (d, truth(d) + 1.2 + 0.2 * rng.normal()))
        .collect();
    let named = run_with_clinic(&home, &clinic, Some("clinic"), 111);
    let t = named.table("source_offsets").unwrap();
    assert_eq!(t.rows.len(), 1);
    assert_eq!(t.rows[0][0], Cell::Text("clinic".into()));
    let Cell::Number(off) = t.rows[0][1] else {
        panic!("{:?}", t.rows[0]);
    };
    // Shrunk a little towards 0 by the N(0, 1 kg) prior, but clearly the clothes.
    assert!((off - 1.2).abs() < 0.35, "offset {off}");
    // With the offset the end of the trend stays with the home scale's truth; the same
    // readings without a source (taken as home-scale readings) pull it up.
    let end = |o: &ModuleOutput| o.scalar("current_weight_kg").unwrap();
    let unnamed = run_with_clinic(&home, &clinic, None, 111);
    let home_only = run(&home, 111);
    assert!(
        (end(&named) - end(&home_only)).abs() < 0.15,
        "{} vs {}",
        end(&named),
        end(&home_only)
    );
    assert!(
        end(&unnamed) - end(&home_only) > (end(&named) - end(&home_only)).abs() + 0.1,
        "{} / {} / {}",
        end(&unnamed),
        end(&named),
        end(&home_only)
    );
    // Home-only data have no offsets.
    assert!(home_only.table("source_offsets").unwrap().rows.is_empty());
}

/// Water and glycogen refilled by rising intake flatten the scale before tissue loss stops; with
/// a food log the plateau is dated where tissue loss stopped. The fast weight is built here with
/// Hall's linearisation (Hall et al. 2011, Lancet 378:826, appendix): κ·(x − 1) with
/// κ = 3.7·0.5/2 + 4000/3000 kg and x the intake relative to its mean.
#[test]
fn water_refilled_by_rising_intake_does_not_start_a_plateau() {
    let kappa = 3.7 * 0.5 / 2.0 + 4000.0 / 3000.0;
    // Intake 1500 kcal/d, rising to 2100 over days 60–110, then 2100.
    let intake = |d: i64| 1500.0 + 600.0 * ((d - 60) as f64 / 50.0).clamp(0.0, 1.0);
    let days = 170;
    let mean_intake = (0..days).map(intake).sum::<f64>() / days as f64;
    // Tissue: −0.8 kg/wk to day 60, −0.3 kg/wk to day 110, then flat.
    let tissue = |d: i64| {
        let d = d as f64;
        90.0 - 0.8 / 7.0 * d.min(60.0) - 0.3 / 7.0 * (d.clamp(60.0, 110.0) - 60.0)
    };
    let mut rng = Rng(11);
    let weights: Vec<(i64, f64)> = (0..days)
        .map(|d| {
            let fast = kappa * (intake(d) / mean_intake - 1.0);
            (d, tissue(d) + fast + 0.2 * rng.normal())
        })
        .collect();
    let onset = |out: &ModuleOutput| {
        kinds(out)
            .into_iter()
            .find(|k| k.0 == "plateau")
            .map(|k| (NaiveDate::parse_from_str(&k.1, "%Y-%m-%d").unwrap() - day0()).num_days())
    };
    // Without a log the refill reads as a stall: weight slope −0.3 + 0.77/50·7 ≈ −0.19 kg/wk,
    // inside ±0.25 % of ~85 kg per week, from about day 60.
    let without = onset(&run(&weights, days - 1)).expect("a plateau on the scale");
    assert!(without < 90, "onset without a log: day {without}");
    let mut data = participant(&weights);
    data.intake = (0..days)
        .map(|d| IntakeDay {
            date: day(d),
            kcal: 0.8 * intake(d),
            carbs_g: None,
            fat_g: None,
            protein_g: None,
            free_sugars_g: None,
        })
        .collect();
    let with = onset(&run_data(&data, days - 1)).expect("a plateau of tissue");
    assert!((96..=124).contains(&with), "onset with the log: day {with}");
}

/// When intake drifts up and tissue loss fades, the food log dates the stall even through
/// day-to-day correlated scale scatter. Tissue here follows energy balance: slope =
/// g·(EI − 2300) kcal/d with g = (1 − 0.1 − 0.14)/7700 kg per kcal (thermic effect and
/// adaptive thermogenesis of Hall et al. 2011, Lancet 378:826, appendix; values from memory);
/// the fast weight is Hall's linearisation as above; the scatter is AR(1) (φ = 0.7, SD 0.6 kg,
/// as in the day-to-day weight records of Orsama et al. 2014; values from memory) plus 0.1 kg
/// reading noise; the log holds 75 % of intake (± 10 % a day) on 80 % of days. Intake rises
/// from 1600 to 2300 kcal/d over days 40–100, so the slope enters the ±0.25 %/wk band
/// (≈ 0.030 kg/d at 85 kg) on about day 73.
#[test]
fn a_fading_loss_is_dated_by_the_food_log_through_correlated_scatter() {
    let kappa = 3.7 * 0.5 / 2.0 + 4000.0 / 3000.0;
    let g = (1.0 - 0.1 - 0.14) / 7700.0;
    let intake = |d: i64| 1600.0 + 700.0 * ((d - 40) as f64 / 60.0).clamp(0.0, 1.0);
    let days = 170;
    let mean_intake = (0..days).map(intake).sum::<f64>() / days as f64;
    let mut tissue = vec![92.0];
    for d in 1..days {
        tissue.push(tissue[d as usize - 1] + g * (intake(d - 1) - 2300.0));
    }
    let true_onset = (0..days)
        .find(|&d| g * (intake(d) - 2300.0) > -0.0025 * tissue[d as usize] / 7.0)
        .unwrap();
    assert!((72..=76).contains(&true_onset), "{true_onset}");
    let mut errors = Vec::new();
    for seed in 1..=8u64 {
        let mut rng = Rng(1000 + seed);
        let mut ar = 0.0;
        let phi: f64 = 0.7;
        let innov_sd = 0.6 * (1.0 - phi * phi).sqrt();
        let weights: Vec<(i64, f64)> = (0..days)
            .map(|d| {
                ar = phi * ar + innov_sd * rng.normal();
                let fast = kappa * (intake(d) / mean_intake - 1.0);
                let w = tissue[d as usize] + fast + ar + 0.1 * rng.normal();
                (d, (w * 10.0).round() / 10.0)
            })
            .collect();
        let mut data = participant(&weights);
        data.intake = (0..days)
            .filter_map(|d| {
                let logged = rng.uniform() < 0.8;
                let kcal = 0.75 * intake(d) * (1.0 + 0.1 * rng.normal());
                logged.then_some(IntakeDay {
                    date: day(d),
                    kcal,
                    carbs_g: None,
                    fat_g: None,
                    protein_g: None,
                    free_sugars_g: None,
                })
            })
            .collect();
        let out = run_data(&data, days - 1);
        let onset = kinds(&out)
            .into_iter()
            .find(|k| k.0 == "plateau")
            .map(|k| (NaiveDate::parse_from_str(&k.1, "%Y-%m-%d").unwrap() - day0()).num_days());
        errors.push(onset.map(|o| o - true_onset));
    }
    let hits = errors
        .iter()
        .filter(|e| e.is_some_and(|e| e.abs() <= 14))
        .count();
    // Measured: 6 of 8 (two seeds' scatter is strong enough that the weigh-ins reject the held
    // slope and the free trend follows the scatter; `fast::TISSUE_HELD_SLOPE_REJECTED`). The
    // trend without the log as input dated 5 of 8 within ±14 days.
    assert!(hits >= 6, "onset errors (days) by seed: {errors:?}");
}

/// A first month of eight weigh-ins (sample program, SG-026, April 2026, in lb) whose first two,
/// a day apart, differ by 4 lb: the outlier screen then refused six of the eight, the noise
/// estimated from the two left shrank, and the trend ran on to 53 kg ("−29.8 kg", BMI 17.2)
/// for a man weighing about 82 kg. A screen that refuses more than a quarter of the weigh-ins
/// is not finding stray weigh-ins: the fit is made without it.
#[test]
fn a_screen_that_refuses_most_weigh_ins_is_not_used() {
    let lb = 0.453_592_37;
    let home: Vec<(i64, f64)> = [(0, 182.4), (1, 178.3), (6, 179.5), (11, 181.9), (12, 181.0)]
        .iter()
        .map(|&(d, w)| (d, w * lb))
        .collect();
    let clinic: Vec<(i64, f64)> = [(2, 180.7), (9, 183.3), (16, 179.5)]
        .iter()
        .map(|&(d, w)| (d, w * lb))
        .collect();
    let out = run_with_clinic(&home, &clinic, Some("clinic"), 18);
    let current = out.scalar("current_weight_kg").unwrap();
    // Every weigh-in lies between 178.3 and 183.3 lb (80.9–83.1 kg).
    assert!((80.0..84.0).contains(&current), "current {current}");
    assert_eq!(out.scalar("outliers_ignored"), Some(0.0));
    // A single stray weigh-in among many is still screened out.
    let mut many: Vec<(i64, f64)> = (0..40).map(|d| (d, 90.0 - 0.02 * d as f64)).collect();
    many[20].1 = 99.0;
    let out = run(&many, 40);
    assert_eq!(out.scalar("outliers_ignored"), Some(1.0));
}

/// Six kilograms of fluid within two days, kept (heart failure, say): the step test cannot
/// tell it from a new scale, and once the step was moved out of the trend, the fast-gain flag
/// that used to put such a rise before a clinician was gone and the only word left was a
/// notice saying body weight does not change that fast. The step flag is now clinical in the
/// period in which the step is first found, and a notice in later periods (as a fast spell is
/// flagged once), also when the step came too late in one period to be found before the next.
#[test]
fn a_step_that_may_be_real_fluid_is_for_a_clinician_in_the_period_it_is_first_found() {
    let wiggle = [0.3, -0.2, 0.1, -0.4, 0.2, 0.0, -0.1];
    // 6 kg from day `rise_from` on, `per_day` kg a day.
    let series = |rise_from: i64, per_day: f64| -> Vec<(i64, f64)> {
        (0..150)
            .map(|i| {
                let rise = (per_day * (i - rise_from + 1) as f64).clamp(0.0, 6.0);
                (i, 100.0 + wiggle[(i % 7) as usize] + rise)
            })
            .collect()
    };
    let step_flag = |out: &ModuleOutput| {
        let f: Vec<_> = out
            .flags
            .iter()
            .filter(|f| f.code == "weigh_in_step")
            .collect();
        assert!(f.len() <= 1);
        f.first().map(|f| (f.severity, f.message.clone()))
    };
    let data = participant(&series(60, 3.0));
    // Period of days 30-89: the rise on days 60-61 is found and moved, and is for a clinician.
    let now = run_period(&data, 30, 89);
    let t = now.table("weigh_in_steps").unwrap();
    assert_eq!(t.rows.len(), 1, "{:?}", t.rows);
    let (severity, message) = step_flag(&now).expect("step flag");
    assert_eq!(severity, FlagSeverity::Clinical);
    assert!(
        message.contains("review the change with a licensed clinician"),
        "{message}"
    );
    // Next period: the weigh-ins before it already showed the step; a notice.
    let next = run_period(&data, 90, 119);
    assert_eq!(next.table("weigh_in_steps").unwrap().rows.len(), 1);
    assert_eq!(step_flag(&next).unwrap().0, FlagSeverity::Notice);
    // A rise on day 86 has no week after it by day 89: no step to move yet, and the outlier
    // screen left the new level out, so nothing was said until the next period. Now the jump
    // is named at once, for a clinician, and not moved; and the next period, where the week
    // has passed, moves it and names it again.
    let late = participant(&series(86, 6.0));
    let then = run_period(&late, 60, 89);
    assert_eq!(then.table("weigh_in_steps").unwrap().rows.len(), 0);
    let (severity, message) = step_flag(&then).expect("recent jump named");
    assert_eq!(severity, FlagSeverity::Clinical);
    assert!(
        message.starts_with(
            "The last weigh-ins jumped: from 2027-05-26 on they are about 6.0 kg (13.2 lb) \
             higher than before."
        ),
        "{message}"
    );
    let next = run_period(&late, 90, 119);
    assert_eq!(next.table("weigh_in_steps").unwrap().rows.len(), 1);
    assert_eq!(step_flag(&next).unwrap().0, FlagSeverity::Clinical);
    // Two days of a new level are not enough to name.
    assert_eq!(
        step_flag(&run_period(&participant(&series(88, 6.0)), 60, 89)),
        None
    );
}

/// A slow, steady regain after a loss: 0.8 kg a week off 100 kg for 12 weeks, then +0.2 % a
/// week for 8 weeks (1.4 kg, inside the plateau band of 0.25 % a week), weighed daily with a
/// scatter of 0.5 kg. It was a `plateau` with `not_regaining`: the level test (P(rise > 1 % of
/// baseline) ≥ 0.9) saw rises of 1.2–1.3 kg ± 0.25 (the smoother rounds the turn) and did not
/// fire. A rise above 1 % with the last window's slope confirmed above zero is a regain; the same
/// loss followed by 8 flat weeks is not.
#[test]
fn a_slow_steady_regain_after_a_loss_is_regaining() {
    let series = |seed: u64, per_week: f64| -> Vec<(i64, f64)> {
        let mut rng = Rng(seed);
        (0..140)
            .map(|d| {
                let x = d as f64;
                let truth = if d < 84 {
                    100.0 - 0.8 / 7.0 * x
                } else {
                    90.4 * (1.0 + per_week / 7.0 * (x - 84.0))
                };
                (d, truth + 0.5 * rng.normal())
            })
            .collect()
    };
    let mut level_alone = 0;
    for seed in 1..=8 {
        let out = run(&series(seed, 0.002), 139);
        assert_eq!(out.text("regain_verdict"), Some("regaining"), "seed {seed}");
        if out.scalar("regain_confidence").unwrap() >= 0.9 {
            level_alone += 1;
        }
        let flat = run(&series(seed, 0.0), 139);
        assert_eq!(
            flat.text("regain_verdict"),
            Some("not_regaining"),
            "seed {seed}"
        );
    }
    // The level test alone said so for 2 of the 8.
    assert_eq!(level_alone, 2);
}

/// Weekly weigh-ins hold 4 days in a 4-week window, never the 8 a plateau verdict needs, but a
/// loss whose whole interval lies below the band is shown by them as well (the issue's "weekly
/// weighers never get a verdict"; before, `insufficient_data` at 1 kg a week).
#[test]
fn weekly_weigh_ins_with_a_clear_loss_are_losing() {
    let mut rng = Rng(5);
    let w: Vec<(i64, f64)> = (0..13)
        .map(|k| (7 * k, 95.0 - 1.0 * k as f64 + 0.4 * rng.normal()))
        .collect();
    let out = run(&w, 84);
    assert_eq!(out.text("status"), Some("losing"));
    let slope = out.scalar("slope_kg_per_week").unwrap();
    assert!((-1.4..=-0.6).contains(&slope), "{slope}");
    assert!(
        kinds(&out).iter().any(|k| k.0 == "loss"),
        "{:?}",
        kinds(&out)
    );
    // The same weeks with the weight held: no plateau or steady verdict from 4 weigh-ins.
    let flat: Vec<(i64, f64)> = (0..13)
        .map(|k| (7 * k, 95.0 + 0.4 * rng.normal()))
        .collect();
    assert_eq!(run(&flat, 84).text("status"), Some("insufficient_data"));
}

/// A stall weighed weekly after weeks of loss: the smoother's slope, fitted on the loss, leans
/// toward it, and four readings scatter. The window's own readings must show the fall at 97.5 %
/// one-sided; with only a point beyond the band asked of them, 63 of 500 such records with no
/// change at all (scatter 0.7 kg) were "losing" (a review of this rule, 2026-12), 12.6 %.
#[test]
fn a_stall_weighed_weekly_after_a_loss_is_seldom_called_a_loss() {
    let mut losing = 0;
    let runs = 200;
    for seed in 0..runs {
        let mut rng = Rng(seed * 13 + 2);
        let phase = (seed % 7) as i64;
        let w: Vec<(i64, f64)> = (0..=111i64)
            .filter(|d| d % 7 == phase)
            .map(|d| {
                let truth = 95.0 - 0.8 / 7.0 * d.min(84) as f64;
                (d, truth + 0.7 * rng.normal())
            })
            .collect();
        losing += usize::from(run(&w, 111).text("status") == Some("losing"));
    }
    // Measured 9 of 200 (4.5 %); 23 of 200 (11.5 %) with the point-only check.
    assert!(losing <= 12, "{losing} of {runs} flat records were losing");
}

/// With weekly weigh-ins the smoother's slope cannot turn between two readings, so after a
/// loss it can still place a whole interval below the band when the last readings rise. The
/// window's own readings must show the loss too. The readings are those of validation seed
/// 20261202, person 164 (simulated), who stopped after day 100: "losing" at day 119 while the
/// true weight rose 0.15 kg a week.
#[test]
fn weekly_weigh_ins_that_turned_up_are_not_a_loss() {
    let w: Vec<(i64, f64)> = [
        (2, 97.5),
        (9, 97.0),
        (16, 95.6),
        (23, 96.4),
        (30, 94.8),
        (37, 92.9),
        (44, 94.1),
        (51, 93.6),
        (58, 92.3),
        (65, 93.5),
        (72, 92.9),
        (79, 91.6),
        (93, 89.9),
        (100, 88.4),
        (107, 89.5),
        (114, 90.1),
    ]
    .into_iter()
    .map(|(d, y)| (d - 2, y))
    .collect();
    let out = run(&w, 117);
    assert_ne!(out.text("status"), Some("losing"));
    let t = out.scalar("theil_sen_slope_kg_per_week").unwrap();
    assert!(t > 0.0, "{t}");
}

//! Rough throughput check of the trend module (not a test: speed is measured here only).
//!
//! `cargo run --release -p cohortpress-metric-trend --example throughput` runs the module on
//! 10,000 synthetic participants with 180 days each (about 5 weigh-ins a week) on one thread.

use chrono::NaiveDate;
use cohortpress_metric_api::units::{Length, Mass};
use cohortpress_metric_api::view::ModuleView;
use cohortpress_metric_api::{
    MetricModule, ModuleContext, ParticipantData, Period, Profile, ProgramInfo, Sex, Targets,
    UnitSystem, WeighIn,
};
use cohortpress_metric_trend::TrendModule;
use cohortpress_metric_trend::view::{Status, TrendView};
use std::collections::BTreeMap;
use std::time::Instant;

fn main() {
    let start = NaiveDate::from_ymd_opt(2027, 1, 4).unwrap();
    let module = TrendModule;
    let ctx = ModuleContext {
        program: ProgramInfo {
            id: "bench".into(),
            title: "Bench".into(),
            start,
            end: start + chrono::Duration::days(179),
            units: UnitSystem::Metric,
            targets: Targets::default(),
        },
        period: Period {
            from: start,
            to: start + chrono::Duration::days(179),
        },
        as_of: start + chrono::Duration::days(179),
        settings: module
            .spec()
            .resolve_settings(&serde_json::Value::Null)
            .unwrap(),
        earlier: BTreeMap::new(),
    };
    // A cheap deterministic generator (xorshift) is enough for timing.
    let mut s: u64 = 0x2545_F491_4F6C_DD1D;
    let mut next = move || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    let people: Vec<ParticipantData> = (0..10_000)
        .map(|i| {
            let w0 = 80.0 + (i % 40) as f64;
            let mut weights = Vec::new();
            for d in 0..180 {
                if next() < 0.7 {
                    let kg = w0 - 0.05 * d as f64 + (next() - 0.5) * 2.0;
                    weights.push(WeighIn {
                        date: start + chrono::Duration::days(d),
                        time: None,
                        weight: Mass::from_kg(kg),
                        source: None,
                    });
                }
            }
            ParticipantData {
                profile: Profile {
                    id: format!("P{i}"),
                    name: None,
                    sex: Some(Sex::Male),
                    birth_date: None,
                    age_years: 40.0,
                    height: Length::from_cm(175.0),
                    enrolled: start,
                    withdrew: None,
                    withdrawal_reason: Default::default(),
                    groups: BTreeMap::new(),
                    body_fat_percent: None,
                    targets: Targets::default(),
                    flags: vec![],
                },
                weights,
                intake: vec![],
                activity: vec![],
                sessions: vec![],
                labs: vec![],
            }
        })
        .collect();
    let t = Instant::now();
    let mut plateaus = 0;
    for p in &people {
        let out = module.compute(&ctx, p).unwrap();
        let status = TrendView::from_output(&out).unwrap().status;
        plateaus += usize::from(status == Status::Plateau);
    }
    println!(
        "{} participants in {:.2?} (one thread); plateau status: {plateaus}",
        people.len(),
        t.elapsed()
    );
}

//! The `adherence` view against the module's real output: names tie to the spec, and
//! view → output → view is the identity.

use cohortpress_metric_adherence::AdherenceModule;
use cohortpress_metric_adherence::view::{AdherenceFlag, AdherenceView};
use cohortpress_metric_api::view::{ModuleView, check_view};
use cohortpress_metric_api::{MetricModule, fixture};

#[test]
fn the_view_reads_every_declared_output_and_round_trips() {
    let m = AdherenceModule;
    let out = m
        .compute(&fixture::context(&m.spec(), &[]), &fixture::participant())
        .unwrap();
    let v: AdherenceView = check_view(&out).unwrap_or_else(|e| panic!("{e}"));
    // The fixture: weigh-ins on 4 days a week, food logs on 5, three 30-minute walks at
    // 3.5 MET (moderate), a weekly session missed every fourth week; twelve whole weeks.
    assert_eq!(v.weigh_ins_per_week, Some(4.0));
    assert_eq!(v.food_log_days_per_week, Some(5.0));
    assert_eq!(v.activity_minutes_per_week, Some(90.0));
    assert_eq!(v.weekly.len(), 12);
    assert_eq!(v.weekly[0].week_start, fixture::start());
    assert_eq!(v.weekly[0].activity_minutes, Some(90.0));
    assert_eq!(v.weekly[0].met_activity_target, Some(false));
    assert_eq!(v.weekly[0].met_weigh_in_target, Some(true));
    assert_eq!(v.sessions_offered_to_date, Some(12.0));
    assert_eq!(v.sessions_attended_to_date, Some(9.0));
    assert!(v.flags.is_empty());
}

#[test]
fn the_gap_flag_reads_as_its_code() {
    let m = AdherenceModule;
    let mut data = fixture::participant();
    let cut = fixture::start() + chrono::Duration::days(40);
    data.weights.retain(|w| w.date < cut);
    data.intake.retain(|w| w.date < cut);
    data.activity.retain(|w| w.date < cut);
    let out = m.compute(&fixture::context(&m.spec(), &[]), &data).unwrap();
    let v = AdherenceView::from_output(&out).unwrap();
    assert_eq!(
        v.flags.iter().map(|f| f.code).collect::<Vec<_>>(),
        [AdherenceFlag::Gap]
    );
    assert_eq!(AdherenceView::from_output(&v.to_output()).unwrap(), v);
}

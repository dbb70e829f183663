//! The `energy` view against the module's real output (after the real `trend` module): names
//! tie to the spec, and view → output → view is the identity.

use cohortpress_metric_api::view::{ModuleView, check_view};
use cohortpress_metric_api::{MetricModule, fixture};
use cohortpress_metric_energy::view::{BodyFatSource, EnergyView, OptionKind};
use cohortpress_metric_energy::{EnergyModule, RestingEquation};
use cohortpress_metric_trend::TrendModule;

#[test]
fn the_view_reads_every_declared_output_and_round_trips() {
    let data = fixture::participant();
    let t = TrendModule;
    let trend = t.compute(&fixture::context(&t.spec(), &[]), &data).unwrap();
    let m = EnergyModule;
    let out = m
        .compute(&fixture::context(&m.spec(), &[("trend", &trend)]), &data)
        .unwrap();
    let v: EnergyView = check_view(&out).unwrap_or_else(|e| panic!("{e}"));
    assert_eq!(v.rmr_equation, RestingEquation::MifflinStJeor);
    assert_eq!(v.body_fat_source, BodyFatSource::Jackson2002);
    // The fixture logs 1650–1690 kcal on five days a week.
    let logged = v.logged_intake_kcal_per_day.value.unwrap();
    assert!((1650.0..=1690.0).contains(&logged), "logged {logged}");
    // Twelve Monday-based weeks from enrolment (a Monday).
    assert_eq!(v.weekly_energy.len(), 12);
    assert_eq!(v.weekly_energy[0].week_start, fixture::start());
    let kinds: Vec<OptionKind> = v.options.iter().map(|o| o.kind).collect();
    assert!(kinds.contains(&OptionKind::Intake), "{kinds:?}");
    assert!(kinds.contains(&OptionKind::Walking), "{kinds:?}");
    // The fixture's last four weeks are level after a loss: one plateau, read by the module.
    assert_eq!(v.plateau_assessment.len(), 1, "{:?}", v.plateau_assessment);
    let i = v.implied_intake_kcal_per_day;
    assert!(i.lower.unwrap() <= i.value.unwrap() && i.value.unwrap() <= i.upper.unwrap());
    assert_eq!(v.implied_intake_lower_kcal_per_day, i.lower);
}

#[test]
fn without_weigh_ins_the_view_reads_the_missing_values() {
    let mut data = fixture::participant();
    data.weights.clear();
    let m = EnergyModule;
    let out = m.compute(&fixture::context(&m.spec(), &[]), &data).unwrap();
    let v = EnergyView::from_output(&out).unwrap();
    assert_eq!(v.body_fat_source, BodyFatSource::None);
    assert_eq!(v.tdee_kcal_per_day.value, None);
    assert!(v.plateau_assessment.is_empty());
    assert_eq!(EnergyView::from_output(&v.to_output()).unwrap(), v);
}

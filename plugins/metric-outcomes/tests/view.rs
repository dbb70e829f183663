//! The `outcomes` view against the module's real output (after the real `trend` module):
//! names tie to the spec, and view → output → view is the identity.

use cohortpress_metric_api::view::{ModuleView, check_view};
use cohortpress_metric_api::{LabTest, MetricModule, fixture};
use cohortpress_metric_outcomes::OutcomesModule;
use cohortpress_metric_outcomes::view::{
    BmiCategory, CurrentWeightSource, LabCategory, OutcomesFlag, OutcomesView, WeightChangeCategory,
};
use cohortpress_metric_trend::TrendModule;

#[test]
fn the_view_reads_every_declared_output_and_round_trips() {
    let data = fixture::participant();
    let t = TrendModule;
    let trend = t.compute(&fixture::context(&t.spec(), &[]), &data).unwrap();
    let m = OutcomesModule;
    let out = m
        .compute(&fixture::context(&m.spec(), &[("trend", &trend)]), &data)
        .unwrap();
    let v: OutcomesView = check_view(&out).unwrap_or_else(|e| panic!("{e}"));
    // The fixture's first weigh-in is 91.6 kg at 165 cm: BMI 33.6 (obesity class I, WHO TRS
    // 894); 8 weeks at −0.6 kg/wk bring the trend to about 87.2 kg, a loss of about 4.8 %.
    assert_eq!(v.current_weight_source, CurrentWeightSource::Trend);
    assert_eq!(v.bmi_category_baseline, Some(BmiCategory::ObesityClass1));
    assert_eq!(
        v.weight_change_category,
        Some(WeightChangeCategory::Loss3To5)
    );
    let reached: Vec<bool> = v.milestones.iter().map(|m| m.reached).collect();
    assert_eq!(reached[..2], [true, false], "3 % reached, 5 % not");
    assert!(v.milestones[0].date_reached.is_some());
    // Fasting glucose 6.2 mmol/L = 111.7 mg/dL: prediabetes range (ADA 2025, 100–125 mg/dL);
    // HbA1c 5.9 %: prediabetes range (ADA 2025, 5.7–6.4 %).
    assert_eq!(v.labs.len(), 2);
    assert_eq!(v.labs[0].test, LabTest::FastingGlucose);
    assert_eq!(v.labs[0].category, LabCategory::PrediabetesRange);
    assert_eq!(v.labs[1].category, LabCategory::PrediabetesRange);
    let codes: Vec<OutcomesFlag> = v.flags.iter().map(|f| f.code).collect();
    assert!(
        codes.contains(&OutcomesFlag::LabPrediabetesRange),
        "{codes:?}"
    );
}

#[test]
fn without_weigh_ins_the_view_reads_the_missing_values() {
    let mut data = fixture::participant();
    data.weights.clear();
    let m = OutcomesModule;
    let out = m.compute(&fixture::context(&m.spec(), &[]), &data).unwrap();
    let v = OutcomesView::from_output(&out).unwrap();
    assert_eq!(v.baseline_weight_kg, None);
    assert_eq!(v.current_weight_source, CurrentWeightSource::WeighIns);
    assert_eq!(v.bmi_category_current, None);
    assert!(
        v.flags
            .iter()
            .any(|f| f.code == OutcomesFlag::InsufficientData)
    );
    assert_eq!(OutcomesView::from_output(&v.to_output()).unwrap(), v);
}

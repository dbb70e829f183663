//! The `trend` view against the module's real output: names tie to the spec, and
//! view → output → view is the identity.

use cohortpress_metric_api::view::{ModuleView, check_view};
use cohortpress_metric_api::{MetricModule, fixture};
use cohortpress_metric_trend::TrendModule;
use cohortpress_metric_trend::view::{PeriodKind, RegainVerdict, Status, TrendFlag, TrendView};

#[test]
fn the_view_reads_every_declared_output_and_round_trips() {
    let m = TrendModule;
    let out = m
        .compute(&fixture::context(&m.spec(), &[]), &fixture::participant())
        .unwrap();
    let v: TrendView = check_view(&out).unwrap_or_else(|e| panic!("{e}"));
    // Eight weeks of loss at 0.6 kg/wk from 92 kg, then four weeks level (the fixture).
    assert_eq!(v.status, Status::Plateau);
    assert_eq!(v.regain_verdict, Some(RegainVerdict::NotRegaining));
    let kinds: Vec<PeriodKind> = v.periods.iter().map(|p| p.kind).collect();
    assert!(kinds.contains(&PeriodKind::Loss), "{kinds:?}");
    assert!(kinds.contains(&PeriodKind::Plateau), "{kinds:?}");
    let w = v.current_weight_kg.value.unwrap();
    assert!((w - 87.2).abs() < 0.6, "current trend weight {w}");
    assert!(v.plateau_onset.is_some());
    assert!(v.flags.is_empty());
    // The view's values are the output's.
    assert_eq!(out.scalar("current_weight_kg"), v.current_weight_kg.value);
    assert_eq!(out.text("status"), Some("plateau"));
}

#[test]
fn too_few_weigh_ins_still_read_with_the_later_outputs_missing() {
    let m = TrendModule;
    let mut data = fixture::participant();
    data.weights.truncate(2);
    let out = m.compute(&fixture::context(&m.spec(), &[]), &data).unwrap();
    let v = TrendView::from_output(&out).unwrap();
    assert_eq!(v.status, Status::InsufficientData);
    assert_eq!(v.flags[0].code, TrendFlag::InsufficientData);
    // No trend, no regain verdict: said as `insufficient_data`, as for a trend whose
    // weigh-ins stopped weeks before the period's end (it was left empty here).
    assert_eq!(v.regain_verdict, Some(RegainVerdict::InsufficientData));
    assert_eq!(out.text("regain_verdict"), Some("insufficient_data"));
    assert_eq!(v.current_weight_kg.value, None);
    assert!(v.periods.is_empty());
    assert_eq!(TrendView::from_output(&v.to_output()).unwrap(), v);
}

#[test]
fn a_renamed_output_or_column_is_an_error_that_names_it() {
    let m = TrendModule;
    let mut out = m
        .compute(&fixture::context(&m.spec(), &[]), &fixture::participant())
        .unwrap();
    out.tables[0].columns[1].name = "from".into();
    let e = TrendView::from_output(&out).unwrap_err();
    assert_eq!(
        e.to_string(),
        "module `trend`, output `periods`, column `start`: the column is missing"
    );
    out.scalars.retain(|s| s.name != "slope_kg_per_week");
    out.tables.clear();
    let e = TrendView::from_output(&out).unwrap_err();
    assert_eq!(
        e.to_string(),
        "module `trend`, output `periods`: the table is missing"
    );
}

/// Three weigh-ins weeks apart (the fixture's first and middle ones, and its last 1 kg
/// heavier: down from 92 kg, then up by about 1 % of it) cannot tell a rise of more than 1 % of
/// baseline weight from none: the verdict was `not_regaining`, now `insufficient_data`, the
/// status's answer for the same last weeks. With every weigh-in the fixture's person is
/// `not_regaining`.
#[test]
fn three_sparse_weigh_ins_give_no_regain_verdict() {
    let m = TrendModule;
    let mut data = fixture::participant();
    let n = data.weights.len();
    let mut last = data.weights[n - 1].clone();
    last.weight = cohortpress_metric_api::units::Mass::from_kg(last.weight.kg() + 1.0);
    data.weights = vec![data.weights[0].clone(), data.weights[n / 2].clone(), last];
    let out = m.compute(&fixture::context(&m.spec(), &[]), &data).unwrap();
    let v = TrendView::from_output(&out).unwrap();
    // The level test alone (the trend drawn straight between the three, lowest at the last)
    // finds no rise: that alone was `not_regaining`.
    assert!(out.scalar("regain_confidence").unwrap() <= 0.1);
    assert_eq!(out.text("status"), Some("insufficient_data"));
    assert_eq!(v.regain_verdict, Some(RegainVerdict::InsufficientData));
    let full = m
        .compute(&fixture::context(&m.spec(), &[]), &fixture::participant())
        .unwrap();
    assert!(full.scalar("regain_confidence").unwrap() <= 0.1);
    assert_eq!(full.text("regain_verdict"), Some("not_regaining"));
}

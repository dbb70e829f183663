//! Calibration guard: a small fixed-seed simulated cohort is run through the real `trend` and
//! `energy` modules and scored against its known truth. A change that breaks the calibration
//! of the intervals or the detection of plateaus, regain and their causes fails here.
//!
//! The floors sit a little below what this seed measures (see VALIDATION.md for the full
//! 300-participant table), so ordinary refactoring passes and a real regression does not.

use cohortpress_validation::{Summary, run_cohort};

#[test]
fn a_small_simulated_cohort_keeps_its_calibration() {
    let outcomes = run_cohort(7, 120, 180, 2);
    let s = Summary::of(&outcomes);
    let v = |f: cohortpress_validation::Figure, what: &str| {
        f.value
            .unwrap_or_else(|| panic!("{what}: nobody was scored (n = {})", f.n))
    };
    let report = format!("{s:#?}");
    assert!(
        v(s.intake_coverage, "intake coverage") >= 0.90,
        "implied-intake 95 % intervals must cover the truth at least 90 % of the time\n{report}"
    );
    assert!(
        v(s.forecast_coverage, "forecast coverage") >= 0.85,
        "forecast bands lost coverage\n{report}"
    );
    assert!(
        v(s.regain_specificity, "regain specificity") >= 0.95,
        "regain called in people who are not regaining\n{report}"
    );
    assert!(
        v(s.regain_sensitivity, "regain sensitivity") >= 0.5,
        "regain missed\n{report}"
    );
    assert!(
        v(s.plateau_onset_14, "plateau onset") >= 0.40,
        "plateau onsets are no longer found within ±14 days\n{report}"
    );
    assert!(
        v(s.plateau_false, "false plateaus") <= 0.20,
        "plateaus reported where there are none\n{report}"
    );
    assert!(
        v(s.cause_correct, "plateau cause") >= 0.70,
        "plateau causes no longer told apart\n{report}"
    );
    assert!(
        v(s.underreport_mae, "under-reporting") <= 10.0,
        "under-reporting error grew\n{report}"
    );
    assert!(
        v(s.trend_mae, "trend weight") <= 0.5,
        "trend weight error grew\n{report}"
    );
}

//! Calibration guard: fixed-seed simulated cohorts (the published one and a second seed) are
//! run through the real `trend` and `energy` modules and scored against their known truth. A
//! change that breaks the calibration of the intervals or the detection of plateaus, regain
//! and their causes fails here.
//!
//! The floors sit a little below what these seeds measure (VALIDATION.md has the full table),
//! so ordinary refactoring passes and a real regression does not. Goals not yet met (plateau
//! onset, under-reporting, expenditure) are guarded at their
//! current level with a margin (under-reporting 5.9 / 6.1 points → 7; expenditure 180 / 170
//! kcal/d → 200; trend bias 0.1 / 0.0 kg → 0.25).

use cohortpress_validation::truth::Weighing;
use cohortpress_validation::{Figure, Summary, run_cohort};

fn check(seed: u64) {
    let outcomes = run_cohort(seed, 300, 180, 2);
    let s = Summary::of(&outcomes);
    let v = |f: Figure, what: &str| {
        f.value
            .unwrap_or_else(|| panic!("seed {seed}, {what}: nobody was scored (n = {})", f.n))
    };
    let report = format!("seed {seed}\n{s:#?}");
    let floors: [(&str, f64, bool, Figure); 15] = [
        (
            "implied-intake interval coverage",
            0.90,
            true,
            s.intake_coverage,
        ),
        // Measured 96.2 % and 96.6 % with the upper edge allowing a full relapse; 92.5 % and
        // 93.6 % when it allowed half (the goal is 90 %; this floor guards the relapse edge).
        ("forecast band coverage", 0.94, true, s.forecast_coverage),
        ("regain sensitivity", 0.80, true, s.regain_sensitivity),
        ("regain specificity", 0.95, true, s.regain_specificity),
        // Measured 59 % (seed 20261202) and 59 % (seed 7) with the tissue trend taking the
        // food log as its slope's input.
        ("plateau onset within ±14 d", 0.52, true, s.plateau_onset_14),
        ("plateau cause correct", 0.80, true, s.cause_correct),
        (
            "plateaus reported without one",
            0.16,
            false,
            s.plateau_false,
        ),
        ("plateau cause decided wrongly", 0.10, false, s.cause_wrong),
        ("under-reporting MAE, points", 7.0, false, s.underreport_mae),
        ("expenditure MAE, kcal/d", 200.0, false, s.tdee_mae),
        // Measured 97.2 % (seed 20261202) and 97.3 % (seed 7) with the baseline requirement's
        // uncertainty in it.
        ("expenditure interval coverage", 0.90, true, s.tdee_coverage),
        ("trend weight MAE, kg", 0.4, false, s.trend_mae),
        ("trend weight bias, kg", 0.25, false, s.trend_bias),
        // Intake cuts are checked against the low end of the implied intake's 95 % interval, so
        // about 2.5 % at most should take the true intake below the floor; measured 0.5 %
        // (seed 20261202, n = 193) and 0.5 % (seed 7, n = 200); checked against the point
        // estimate instead, 7.1 % (n = 241) and 9.3 % (n = 247).
        (
            "intake cuts called safe below the floor",
            0.035,
            false,
            s.cuts_below_floor,
        ),
        // None at all: without the module's BMI-16 limit, 12.3 % of the published cohort had a
        // steady state or forecast below it.
        (
            "a steady state or forecast below BMI 16, or a negative bound",
            0.0,
            false,
            s.impossible,
        ),
    ];
    // The status at days 60, 120 and 180. Weekly weighers get a verdict where the weight
    // clearly moved (measured 26.9 % and 27.3 %, n = 26 and 22; none before a loss or rise was
    // allowed from fewer than 8 weigh-ins, about half when the window's own readings had only to
    // point beyond the band, which called a stall "losing" far more often; the trend crate's
    // `a_stall_weighed_weekly_after_a_loss_is_seldom_called_a_loss`), and verdicts stay right
    // (contradicted: 1.1 % and 1.6 % of all; 1 of 46 and 0 of 34 weekly).
    let weekly = Summary::of(outcomes.iter().filter(|o| o.weighing == Weighing::Weekly));
    let floors = floors.into_iter().chain([
        (
            "status verdicts the true weight change contradicts",
            0.03,
            false,
            s.status_wrong,
        ),
        (
            "weekly weighers: a verdict where the weight moved",
            0.2,
            true,
            weekly.status_verdict_moving,
        ),
        (
            "weekly weighers: verdicts the true weight change contradicts",
            0.05,
            false,
            weekly.status_wrong,
        ),
    ]);
    for (what, floor, at_least, f) in floors {
        let x = v(f, what);
        let ok = if at_least {
            x >= floor
        } else {
            x.abs() <= floor
        };
        assert!(
            ok,
            "{what}: {x:.3} is {} {floor}\n{report}",
            if at_least { "below" } else { "above" }
        );
    }
}

#[test]
fn the_published_cohort_keeps_its_calibration() {
    check(20_261_202);
}

#[test]
fn a_second_cohort_keeps_its_calibration() {
    check(7);
}

/// Scales that are noisier and more correlated than the simulator's (S1 in VALIDATION.md,
/// "Stress runs") and heavier clinic clothing (S5): the trend estimates the scatter, its
/// correlation and each source's offset from the person's own weigh-ins, so measurement that
/// departs from the simulator's ranges must not break the intervals. Measured 95.2 % / 97.6 %
/// (implied intake) and 96.8 % / 96.8 % (expenditure), forecasts 96.9 % / 96.6 %.
#[test]
fn noisier_scales_and_heavier_clothing_keep_the_intervals() {
    use cohortpress_validation::run_cohort_in;
    use cohortpress_validation::truth::Scenario;
    for sc in [Scenario::STRESS[0], Scenario::STRESS[4]] {
        let s = Summary::of(&run_cohort_in(
            20_261_202,
            300,
            180,
            2,
            cohortpress_validation::Oracle::None,
            &sc,
        ));
        for (what, f) in [
            ("implied-intake interval coverage", s.intake_coverage),
            ("expenditure interval coverage", s.tdee_coverage),
            ("forecast band coverage", s.forecast_coverage),
        ] {
            let x = f.value.expect("people were scored");
            assert!(x >= 0.90, "{}: {what} {x:.3} is below 0.90", sc.name);
        }
        // Status verdicts the true weight change contradicts: measured 4.2 % and 1.0 % (6.5 %
        // and 1.4 % when a pace beyond the band was a loss or rise whatever its interval said
        // of zero).
        let x = s.status_wrong.value.expect("statuses were scored");
        assert!(
            x <= 0.055,
            "{}: status contradicted {x:.3} is above 0.055",
            sc.name
        );
    }
}

/// Activity levels spread over 1.2–2.2, wider than the simulator's 1.35–1.95 (S2 in
/// VALIDATION.md, "Stress runs"): the activity prior (1.6 ± 0.20) must keep the implied
/// intake's interval at 90 % for a cohort unlike the one it was checked on. Measured 93.5 %;
/// with the earlier prior SD of 0.15, 87.9 %. (Expenditure, 89.7 %, is not asserted: its
/// interval also rests on the under-reporting prior, "What the records can identify".)
#[test]
fn a_cohort_more_spread_in_activity_keeps_the_intake_interval() {
    use cohortpress_validation::run_cohort_in;
    use cohortpress_validation::truth::Scenario;
    let sc = Scenario::STRESS[1];
    assert!(sc.pal == (1.2, 2.2), "{}", sc.name);
    let s = Summary::of(&run_cohort_in(
        20_261_202,
        300,
        180,
        2,
        cohortpress_validation::Oracle::None,
        &sc,
    ));
    let x = s.intake_coverage.value.expect("people were scored");
    assert!(
        x >= 0.90,
        "{}: implied-intake interval coverage {x:.3} is below 0.90",
        sc.name
    );
}

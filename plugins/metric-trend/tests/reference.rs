//! Reference-value tests: each expected number names its source beside it.

use approx::assert_abs_diff_eq;
use cohortpress_metric_trend::llt::{LltParams, StatePrior, kalman_filter, rts_smoother};
use cohortpress_metric_trend::theil_sen::{mann_kendall, theil_sen};

const T5: [f64; 5] = [0.0, 7.0, 14.0, 21.0, 28.0];
const Y5: [f64; 5] = [90.0, 89.4, 89.6, 88.9, 88.7];

#[test]
fn llt_with_q_zero_matches_reference_check() {
    // With q = 0 the filter equals OLS. Regression values for our implementation of the formula
    // (q = 0, diffuse prior P0 = 1e8·I, σ²_ε = 0.25); tolerance 1e-5 because P0 = 1e8 is only
    // approximately diffuse.
    let y = Y5.map(Some);
    let run = kalman_filter(
        &T5,
        &y,
        LltParams {
            sigma2_eps: 0.25,
            q: 0.0,
        },
        StatePrior::diffuse(0.0, 1e8),
        None,
    );
    let last = run.steps.last().unwrap();
    assert_abs_diff_eq!(last.filtered_mean[0], 88.700, epsilon = 1e-5);
    assert_abs_diff_eq!(last.filtered_mean[1], -0.044_285_7, epsilon = 1e-5);
    assert_abs_diff_eq!(last.filtered_cov[1][1].sqrt(), 0.022_587_7, epsilon = 1e-5);
}

#[test]
fn llt_with_q_zero_equals_ols_on_irregular_tied_data() {
    // OLS slope -0.105481377372 and intercept 100.902529866479: scipy 1.17.1
    // `stats.linregress` (tests/data/theil_sen_check.py). The slope's SD with known σ is
    // σ/√Sxx (ordinary least squares), computed here from the times.
    let t = [
        0.0, 1.0, 3.0, 3.0, 6.0, 8.0, 9.0, 13.0, 14.0, 17.0, 20.0, 21.0,
    ];
    let y = [
        101.2, 100.8, 100.9, 100.1, 100.4, 99.7, 100.1, 99.2, 99.6, 98.8, 99.2, 98.7,
    ];
    let sigma2 = 0.36;
    let run = kalman_filter(
        &t,
        &y.map(Some),
        LltParams {
            sigma2_eps: sigma2,
            q: 0.0,
        },
        StatePrior::diffuse(y[0], 1e8),
        None,
    );
    let last = run.steps.last().unwrap();
    assert_abs_diff_eq!(last.filtered_mean[1], -0.105_481_377_372, epsilon = 1e-6);
    assert_abs_diff_eq!(
        last.filtered_mean[0],
        100.902_529_866_479 - 0.105_481_377_372 * 21.0,
        epsilon = 1e-5
    );
    let mean_t = t.iter().sum::<f64>() / t.len() as f64;
    let sxx: f64 = t.iter().map(|x| (x - mean_t).powi(2)).sum();
    assert_abs_diff_eq!(
        last.filtered_cov[1][1].sqrt(),
        (sigma2 / sxx).sqrt(),
        epsilon = 1e-6
    );

    // With q = 0 the smoother puts every day on the same OLS line.
    let sm = rts_smoother(run);
    for (i, m) in sm.mean.iter().enumerate() {
        assert_abs_diff_eq!(m[1], -0.105_481_377_372, epsilon = 1e-6);
        assert_abs_diff_eq!(
            m[0],
            100.902_529_866_479 - 0.105_481_377_372 * t[i],
            epsilon = 1e-5
        );
    }
    // Mean slope over the whole span from the smoothed states equals the OLS slope, and its
    // SD (from the lag covariance) equals the OLS SD.
    let (m, sd) = sm.mean_slope(0, t.len() - 1).unwrap();
    assert_abs_diff_eq!(m, -0.105_481_377_372, epsilon = 1e-6);
    assert_abs_diff_eq!(sd, (sigma2 / sxx).sqrt(), epsilon = 1e-5);
}

#[test]
fn theil_sen_matches_reference_and_scipy() {
    // Regression values for our implementation of Sen 1968 (J Am Stat Assoc 63:1379) /
    // Gilbert 1987 (from memory); the same numbers from scipy 1.17.1
    // `stats.theilslopes(y, t, alpha=0.95)` (tests/data/theil_sen_check.py): slope
    // -0.0410714286, intercept 89.975, interval [-0.1, 0.0285714286].
    let r = theil_sen(&T5, &Y5).unwrap();
    assert_abs_diff_eq!(r.slope, -0.041_071_428_6, epsilon = 1e-9);
    assert_abs_diff_eq!(r.slope * 7.0, -0.2875, epsilon = 1e-9);
    assert_abs_diff_eq!(r.intercept, 89.975, epsilon = 1e-9);
    assert_abs_diff_eq!(r.lower, -0.1, epsilon = 1e-9);
    assert_abs_diff_eq!(r.upper, 0.028_571_428_6, epsilon = 1e-9);
}

#[test]
fn theil_sen_with_ties_matches_scipy() {
    // scipy 1.17.1 `stats.theilslopes(y, t, alpha=0.95)` (tests/data/theil_sen_check.py):
    // slope -0.1, intercept 100.75, interval [-0.1411764706, -0.08]. Ties in t and in y
    // exercise the tie correction of Var(S) (Sen 1968 eq. 2.6).
    let t = [
        0.0, 1.0, 3.0, 3.0, 6.0, 8.0, 9.0, 13.0, 14.0, 17.0, 20.0, 21.0,
    ];
    let y = [
        101.2, 100.8, 100.9, 100.1, 100.4, 99.7, 100.1, 99.2, 99.6, 98.8, 99.2, 98.7,
    ];
    let r = theil_sen(&t, &y).unwrap();
    assert_abs_diff_eq!(r.slope, -0.1, epsilon = 1e-9);
    assert_abs_diff_eq!(r.intercept, 100.75, epsilon = 1e-9);
    assert_abs_diff_eq!(r.lower, -0.141_176_470_6, epsilon = 1e-9);
    assert_abs_diff_eq!(r.upper, -0.08, epsilon = 1e-9);
}

#[test]
fn mann_kendall_matches_reference() {
    // Mann–Kendall, computed: S = -8, Var(S) = 16.667 (n(n−1)(2n+5)/18 with n = 5, no ties).
    let (s, var) = mann_kendall(&T5, &Y5);
    assert_abs_diff_eq!(s, -8.0, epsilon = 1e-12);
    assert_abs_diff_eq!(var, 16.666_666_666_7, epsilon = 1e-9);
}

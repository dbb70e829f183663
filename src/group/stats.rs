//! Small-sample statistics used by the group report: t-based mean intervals, a distribution-free
//! interval for the median, Wilson score intervals for proportions and Newcombe's interval for a
//! difference of two proportions.
//!
//! Every function works in full double precision; rounding is left to the templates.
//! Quantiles of the t and normal distributions come from `statrs` 0.19.

use serde::Serialize;
use statrs::distribution::{Binomial, ContinuousCDF, DiscreteCDF, Normal, StudentsT};

/// Quantile `p` (0 < p < 1) of Student's t distribution with `df` degrees of freedom.
///
/// # Formula
/// `t_p(df) = F⁻¹(p)` where `F` is the t cumulative distribution function; computed by
/// `statrs::distribution::StudentsT::inverse_cdf` (incomplete-beta inversion).
///
/// # Panics
/// If `df` is not positive or `p` is outside [0, 1] (programming errors, never user input).
pub fn t_quantile(p: f64, df: f64) -> f64 {
    let t = StudentsT::new(0.0, 1.0, df).expect("t distribution needs df > 0");
    t.inverse_cdf(p)
}

/// Quantile `p` (0 < p < 1) of the standard normal distribution.
///
/// # Formula
/// `z_p = Φ⁻¹(p)`, computed by `statrs::distribution::Normal::inverse_cdf`.
pub fn z_quantile(p: f64) -> f64 {
    Normal::standard().inverse_cdf(p)
}

/// The two-sided normal critical value for a confidence level: `z = Φ⁻¹(1 − (1 − conf)/2)`
/// (1.959964 for 0.95).
pub fn z_for_confidence(confidence: f64) -> f64 {
    z_quantile(1.0 - (1.0 - confidence) / 2.0)
}

/// Arithmetic mean; `None` for an empty slice.
pub fn mean(values: &[f64]) -> Option<f64> {
    if values.is_empty() {
        None
    } else {
        Some(values.iter().sum::<f64>() / values.len() as f64)
    }
}

/// Sample median (average of the two middle values for an even count); `None` when empty.
pub fn median(values: &[f64]) -> Option<f64> {
    if values.is_empty() {
        return None;
    }
    let sorted = sorted(values);
    let n = sorted.len();
    Some(if n % 2 == 1 {
        sorted[n / 2]
    } else {
        (sorted[n / 2 - 1] + sorted[n / 2]) / 2.0
    })
}

fn sorted(values: &[f64]) -> Vec<f64> {
    let mut v = values.to_vec();
    v.sort_by(f64::total_cmp);
    v
}

/// A mean with its t-based confidence interval.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MeanCi {
    /// Number of values.
    pub n: usize,
    /// Arithmetic mean.
    pub mean: f64,
    /// Sample standard deviation (divisor n − 1).
    pub sd: f64,
    /// Standard error of the mean, sd/√n.
    pub se: f64,
    /// Lower confidence limit.
    pub lo: f64,
    /// Upper confidence limit.
    pub hi: f64,
}

/// Mean, SD, SE and two-sided t-based confidence interval of `values`.
///
/// # Formula
/// `x̄ = Σx/n`, `s = √(Σ(x − x̄)²/(n − 1))`, `SE = s/√n`,
/// `CI = x̄ ± t_(1−α/2, n−1)·SE` with `α = 1 − confidence` (the standard Student t interval;
/// common practice).
///
/// # Remarks
/// Returns `None` for fewer than two values (no SD, no interval).
pub fn mean_ci_t(values: &[f64], confidence: f64) -> Option<MeanCi> {
    let n = values.len();
    if n < 2 {
        return None;
    }
    let m = mean(values)?;
    let ss: f64 = values.iter().map(|x| (x - m) * (x - m)).sum();
    let sd = (ss / (n as f64 - 1.0)).sqrt();
    let se = sd / (n as f64).sqrt();
    let t = t_quantile(1.0 - (1.0 - confidence) / 2.0, n as f64 - 1.0);
    Some(MeanCi {
        n,
        mean: m,
        sd,
        se,
        lo: m - t * se,
        hi: m + t * se,
    })
}

/// A median with a distribution-free confidence interval from order statistics.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct MedianCi {
    /// Number of values.
    pub n: usize,
    /// Sample median.
    pub median: f64,
    /// Lower limit: the `lower_rank`-th smallest value.
    pub lo: f64,
    /// Upper limit: the `upper_rank`-th smallest value.
    pub hi: f64,
    /// 1-based rank of the lower limit (k).
    pub lower_rank: usize,
    /// 1-based rank of the upper limit (n − k + 1).
    pub upper_rank: usize,
    /// Exact coverage of the interval for a continuous distribution, ≥ the requested level.
    pub coverage: f64,
}

/// Median with a distribution-free (binomial order-statistic) confidence interval.
///
/// # Formula
/// With the values sorted `x(1) ≤ … ≤ x(n)` and `B ~ Binomial(n, ½)`, take the largest `k ≥ 1`
/// with `P(B ≤ k − 1) ≤ α/2`; the interval is `[x(k), x(n − k + 1)]` and its exact coverage is
/// `1 − 2·P(B ≤ k − 1)` (at least `1 − α`). This is the sign-test interval for a quantile in
/// Conover WJ, *Practical Nonparametric Statistics*, 3rd ed. 1999, §3.2 (from memory).
///
/// # Remarks
/// Returns `None` when the sample is too small for any order-statistic interval to reach the
/// requested level (for 95 %: n ≤ 5), or when empty.
pub fn median_ci(values: &[f64], confidence: f64) -> Option<MedianCi> {
    let n = values.len();
    let med = median(values)?;
    let half_alpha = (1.0 - confidence) / 2.0;
    let b = Binomial::new(0.5, n as u64).ok()?;
    // Tolerance: P(B ≤ j) is a sum of exact binary fractions; 1e-12 only absorbs rounding.
    let mut k = 0usize;
    while k < n.div_ceil(2) && b.cdf(k as u64) <= half_alpha + 1e-12 {
        k += 1;
    }
    if k == 0 {
        return None;
    }
    let s = sorted(values);
    let coverage = 1.0 - 2.0 * b.cdf(k as u64 - 1);
    Some(MedianCi {
        n,
        median: med,
        lo: s[k - 1],
        hi: s[n - k],
        lower_rank: k,
        upper_rank: n - k + 1,
        coverage,
    })
}

/// Wilson score interval for a proportion `x/n` with normal critical value `z`.
///
/// # Formula
/// `p̂ = x/n`; `centre = (p̂ + z²/(2n)) / (1 + z²/n)`;
/// `half = z/(1 + z²/n) · √(p̂(1 − p̂)/n + z²/(4n²))`; interval `centre ± half`.
/// Wilson EB, *J Am Stat Assoc* 1927;22:209–212.
///
/// # Remarks
/// `n = 0` carries no information and gives `(0, 1)`. Limits are clamped to [0, 1]; `x = 0`
/// gives a lower limit of exactly 0 and `x = n` an upper limit of exactly 1.
///
/// # Panics
/// If `x > n` (a programming error).
pub fn wilson(x: u64, n: u64, z: f64) -> (f64, f64) {
    assert!(x <= n, "wilson: x = {x} > n = {n}");
    if n == 0 {
        return (0.0, 1.0);
    }
    let nf = n as f64;
    let p = x as f64 / nf;
    let z2 = z * z;
    let denom = 1.0 + z2 / nf;
    let centre = (p + z2 / (2.0 * nf)) / denom;
    let half = z / denom * (p * (1.0 - p) / nf + z2 / (4.0 * nf * nf)).sqrt();
    let lo = if x == 0 {
        0.0
    } else {
        (centre - half).max(0.0)
    };
    let hi = if x == n {
        1.0
    } else {
        (centre + half).min(1.0)
    };
    (lo, hi)
}

/// Newcombe's hybrid score interval for the difference of two proportions `x1/n1 − x2/n2`.
/// Returns `(difference, lower, upper)`.
///
/// # Formula
/// With Wilson limits `(l1, u1)` for `p1` and `(l2, u2)` for `p2` and `d = p1 − p2`:
/// `lower = d − √((p1 − l1)² + (u2 − p2)²)`, `upper = d + √((u1 − p1)² + (p2 − l2)²)`.
/// Method 10 in Newcombe RG, *Stat Med* 1998;17:873–890 (formula from memory).
///
/// # Panics
/// If either sample is empty or `x > n`.
pub fn newcombe_difference(x1: u64, n1: u64, x2: u64, n2: u64, z: f64) -> (f64, f64, f64) {
    assert!(n1 > 0 && n2 > 0, "newcombe_difference: empty sample");
    let p1 = x1 as f64 / n1 as f64;
    let p2 = x2 as f64 / n2 as f64;
    let (l1, u1) = wilson(x1, n1, z);
    let (l2, u2) = wilson(x2, n2, z);
    let d = p1 - p2;
    let lower = d - ((p1 - l1).powi(2) + (u2 - p2).powi(2)).sqrt();
    let upper = d + ((u1 - p1).powi(2) + (p2 - l2).powi(2)).sqrt();
    (d, lower, upper)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Tolerance of the check values below, which are given to 4 decimals.
    const TOL_4DP: f64 = 1e-4;
    /// Tolerance for t quantiles printed to 6 decimals.
    const TOL_6DP: f64 = 1e-6;

    fn close(a: f64, b: f64, tol: f64) -> bool {
        (a - b).abs() <= tol
    }

    #[test]
    fn paired_mean_example() {
        // Paired-mean t interval check (computed from the formula, a regression value for our
        // implementation, not a published number).
        let d = [-2.1, -3.4, 0.5, -1.2, -4.0, -2.6, -0.8, -3.1];
        let r = mean_ci_t(&d, 0.95).unwrap();
        assert_eq!(r.n, 8);
        assert!(close(r.mean, -2.0875, 1e-12), "{r:?}");
        assert!(close(r.sd, 1.50280, 1e-5), "{r:?}");
        assert!(close(r.se, 0.531318, 1e-6), "{r:?}");
        assert!(close(r.lo, -3.3439, TOL_4DP), "{r:?}");
        assert!(close(r.hi, -0.8311, TOL_4DP), "{r:?}");
    }

    #[test]
    fn mean_ci_needs_two_values() {
        assert!(mean_ci_t(&[], 0.95).is_none());
        assert!(mean_ci_t(&[1.0], 0.95).is_none());
        // Two equal values: SD 0, the interval collapses onto the mean.
        let r = mean_ci_t(&[2.0, 2.0], 0.95).unwrap();
        assert_eq!((r.sd, r.lo, r.hi), (0.0, 2.0, 2.0));
    }

    #[test]
    fn t_quantiles() {
        // t(0.975, df) check values, computed from the Student t distribution (regression values).
        for (df, want) in [
            (4.0, 2.776445),
            (7.0, 2.364624),
            (9.0, 2.262157),
            (19.0, 2.093024),
            (29.0, 2.045230),
        ] {
            let got = t_quantile(0.975, df);
            assert!(close(got, want, TOL_6DP), "df {df}: {got} vs {want}");
            // Symmetry of the t distribution.
            assert!(close(t_quantile(0.025, df), -want, TOL_6DP));
        }
    }

    #[test]
    fn z_critical_value() {
        // z = 1.959964 is the standard normal 0.975 quantile (95 %).
        assert!(close(z_for_confidence(0.95), 1.959964, TOL_6DP));
    }

    #[test]
    fn wilson_check_values() {
        // Wilson checks computed from the Wilson 1927 formula (J Am Stat Assoc 22:209; regression
        // values).
        let z = z_for_confidence(0.95);
        for (x, n, lo, hi) in [
            (8, 20, 0.2188, 0.6134),
            (0, 10, 0.0000, 0.2775),
            (10, 10, 0.7225, 1.0000),
            (35, 100, 0.2636, 0.4475),
            (12, 40, 0.1807, 0.4543),
        ] {
            let (l, h) = wilson(x, n, z);
            assert!(close(l, lo, TOL_4DP), "{x}/{n}: lo {l} vs {lo}");
            assert!(close(h, hi, TOL_4DP), "{x}/{n}: hi {h} vs {hi}");
        }
        assert_eq!(wilson(0, 0, z), (0.0, 1.0));
    }

    #[test]
    fn newcombe_check_value() {
        // Newcombe 1998 (Stat Med 17:873) method 10 check, computed from the formula (a
        // regression value): 12/40 vs 8/20.
        let (d, lo, hi) = newcombe_difference(12, 40, 8, 20, z_for_confidence(0.95));
        assert!(close(d, -0.1000, 1e-12));
        assert!(close(lo, -0.3445, TOL_4DP), "{lo}");
        assert!(close(hi, 0.1380, TOL_4DP), "{hi}");
    }

    #[test]
    fn median_and_order_statistic_interval() {
        assert_eq!(median(&[3.0, 1.0, 2.0]), Some(2.0));
        assert_eq!(median(&[4.0, 1.0, 3.0, 2.0]), Some(2.5));
        assert_eq!(median(&[]), None);

        // n = 10, 95 %: P(B ≤ 1) = 11/1024 ≤ 0.025 < P(B ≤ 2) = 56/1024, so k = 2 and the
        // interval is [x(2), x(9)] with coverage 1 − 22/1024 [D] (exact binomial fractions,
        // Conover 1999 §3.2 method).
        let v: Vec<f64> = (1..=10).rev().map(f64::from).collect();
        let r = median_ci(&v, 0.95).unwrap();
        assert_eq!((r.lower_rank, r.upper_rank), (2, 9));
        assert_eq!((r.lo, r.hi, r.median), (2.0, 9.0, 5.5));
        assert!(close(r.coverage, 1.0 - 22.0 / 1024.0, 1e-12));

        // n = 20: P(B ≤ 5) = 21700/1048576 ≈ 0.0207 ≤ 0.025 < P(B ≤ 6) ≈ 0.0577 → ranks 6 and 15 [D].
        let v: Vec<f64> = (1..=20).map(f64::from).collect();
        let r = median_ci(&v, 0.95).unwrap();
        assert_eq!((r.lower_rank, r.upper_rank), (6, 15));
        assert!(close(r.coverage, 1.0 - 2.0 * 21700.0 / 1048576.0, 1e-12));

        // n = 5: the widest interval [x(1), x(5)] covers only 1 − 2/32 = 0.9375 < 0.95.
        assert!(median_ci(&[1.0, 2.0, 3.0, 4.0, 5.0], 0.95).is_none());
        // n = 6: 1 − 2/64 = 0.96875 ≥ 0.95 → [x(1), x(6)].
        let r = median_ci(&[6.0, 5.0, 4.0, 3.0, 2.0, 1.0], 0.95).unwrap();
        assert_eq!((r.lo, r.hi), (1.0, 6.0));
    }
}

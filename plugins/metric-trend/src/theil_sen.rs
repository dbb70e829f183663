//! Theil–Sen slope with Sen's confidence interval, and the Mann–Kendall statistic: a robust
//! cross-check of the state-space trend that needs no model and handles irregular times.

use crate::llt::{Z_95, median_in_place};

/// A Theil–Sen fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TheilSen {
    /// Median of the pairwise slopes (units of y per unit of t).
    pub slope: f64,
    /// Intercept `median(y) − slope·median(t)`.
    pub intercept: f64,
    /// Lower bound of the 95 % interval of the slope.
    pub lower: f64,
    /// Upper bound of the 95 % interval of the slope.
    pub upper: f64,
}

/// Theil–Sen slope with a 95 % confidence interval.
///
/// # Formula
/// Slope = median of `(y_j − y_i)/(t_j − t_i)` over all pairs with `t_j > t_i` (Theil 1950;
/// Sen PK, *J Am Stat Assoc* 1968;63:1379–1389). Intercept `median(y) − slope·median(t)`.
/// Interval (Sen 1968 eq. 2.6; Gilbert 1987, *Statistical Methods for Environmental Pollution
/// Monitoring*): with `N` pairwise slopes sorted ascending (0-based), `n` points,
/// `Var(S) = [n(n−1)(2n+5) − Σ_x k(k−1)(2k+5) − Σ_y k(k−1)(2k+5)]/18` (k = sizes of tied
/// groups in t and in y), `C = z_{0.975}·√Var(S)`,
/// lower = slope at index `max(round((N − C)/2) − 1, 0)`,
/// upper = slope at index `min(round((N + C)/2), N − 1)`, rounding half to even.
///
/// # Remarks
/// The index and rounding conventions are those of SciPy's `theilslopes` (checked against
/// scipy 1.17.1, script in `tests/data/theil_sen_check.py`). Pairs with equal `t` are left out.
/// Returns `None` when there are fewer than 2 points, no pair with distinct times, or a
/// non-finite value. O(n² log n): used on one window of at most a few dozen days.
pub fn theil_sen(t: &[f64], y: &[f64]) -> Option<TheilSen> {
    let n = t.len().min(y.len());
    if n < 2 || t.iter().chain(y).any(|v| !v.is_finite()) {
        return None;
    }
    let mut slopes = Vec::with_capacity(n * (n - 1) / 2);
    for i in 0..n {
        for j in 0..n {
            if t[j] > t[i] {
                slopes.push((y[j] - y[i]) / (t[j] - t[i]));
            }
        }
    }
    if slopes.is_empty() {
        return None;
    }
    let slope = median_in_place(&mut slopes); // also sorts `slopes`
    let intercept =
        median_in_place(&mut y[..n].to_vec()) - slope * median_in_place(&mut t[..n].to_vec());
    let nf = n as f64;
    let var_s = (nf * (nf - 1.0) * (2.0 * nf + 5.0) - tie_term(&t[..n]) - tie_term(&y[..n])) / 18.0;
    let c = Z_95 * var_s.max(0.0).sqrt();
    let big_n = slopes.len() as f64;
    let last = slopes.len() - 1;
    let upper_idx = (((big_n + c) / 2.0).round_ties_even().max(0.0) as usize).min(last);
    let lower_idx = (((big_n - c) / 2.0).round_ties_even() - 1.0).max(0.0) as usize;
    let lower_idx = lower_idx.min(last);
    Some(TheilSen {
        slope,
        intercept,
        lower: slopes[lower_idx],
        upper: slopes[upper_idx],
    })
}

/// `Σ k(k−1)(2k+5)` over groups of equal values.
fn tie_term(x: &[f64]) -> f64 {
    let mut s = x.to_vec();
    s.sort_by(f64::total_cmp);
    let mut total = 0.0;
    let mut i = 0;
    while i < s.len() {
        let mut j = i + 1;
        while j < s.len() && s[j] == s[i] {
            j += 1;
        }
        let k = (j - i) as f64;
        if k > 1.0 {
            total += k * (k - 1.0) * (2.0 * k + 5.0);
        }
        i = j;
    }
    total
}

/// Mann–Kendall statistic S and its variance.
///
/// # Formula
/// `S = Σ_{i<j} sign(y_j − y_i)` for points in time order; `Var(S) = n(n−1)(2n+5)/18` minus the
/// tie correction `Σ k(k−1)(2k+5)/18` over tied groups of y (Kendall 1975; Gilbert 1987).
///
/// # Remarks
/// `t` only orders the points (pairs with equal t count 0). Returns `(0, 0)` for fewer than 2
/// points.
pub fn mann_kendall(t: &[f64], y: &[f64]) -> (f64, f64) {
    let n = t.len().min(y.len());
    if n < 2 {
        return (0.0, 0.0);
    }
    let mut s = 0.0;
    for i in 0..n {
        for j in 0..n {
            if t[j] > t[i] {
                s += (y[j] - y[i]).signum() * f64::from(u8::from(y[j] != y[i]));
            }
        }
    }
    let nf = n as f64;
    let var = (nf * (nf - 1.0) * (2.0 * nf + 5.0) - tie_term(&y[..n])) / 18.0;
    (s, var)
}

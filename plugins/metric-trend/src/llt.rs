//! Local linear trend (integrated random walk) state-space model: Kalman filter, RTS smoother
//! and maximum-likelihood estimation of its two variances, for irregularly spaced weigh-ins.
//!
//! The model (Harvey 1989, *Forecasting, Structural Time Series Models and the Kalman Filter*;
//! Durbin & Koopman 2012, *Time Series Analysis by State Space Methods*, 2nd ed.):
//!
//! ```text
//! y_t = μ_t + ε_t,                      ε_t ~ N(0, σ²_ε)
//! x_t = [μ_t, ν_t]ᵀ  (level kg, slope kg/d)
//! x_{t+Δ} = T(Δ)·x_t + η,               η ~ N(0, Q(Δ))
//! T(Δ) = [[1, Δ], [0, 1]]
//! Q(Δ) = q·[[Δ³/3, Δ²/2], [Δ²/2, Δ]]    (integrated random walk, "smooth trend")
//! ```
//!
//! Because `Q(Δ)` is the exact discretisation of a continuous-time integrated random walk,
//! one step of Δ days equals Δ steps of one day; the likelihood is therefore evaluated on the
//! observation times only (cheap), and the smoother runs once on a daily grid (so that every
//! day gets a state and a band). Everything is O(n) in the number of steps.

/// A 2-vector `[level, slope]`.
pub type Vec2 = [f64; 2];
/// A 2×2 matrix, row major.
pub type Mat2 = [[f64; 2]; 2];

/// Prior variance of the level at the first step in the module (kg²).
///
/// # Remarks
/// 10⁶ (a prior SD of 1000 kg) is diffuse for body weights; the filter's level update needs no
/// subtraction ([`kalman_filter`]), so it costs no precision. The slope's prior is
/// [`SLOPE_PRIOR_VAR`]: as diffuse a slope cost the smoother all its digits. The q = 0 OLS check
/// uses 10⁸ for both; [`StatePrior::diffuse`] takes either.
pub const DIFFUSE_KAPPA: f64 = 1e6;

/// Prior variance of the slope at the first step in the module, (kg/d)²: an SD of 1 kg a day.
///
/// # Remarks
/// A sustained change of 1 kg a day is beyond what energy balance allows (total starvation
/// costs an adult about 0.3–0.5 kg of tissue a day after the first days; Hall 2008, *Int J
/// Obes* 32:573, from memory), so this prior is still non-informative for any real record,
/// which pins the slope to ±0.1 kg/d within two weigh-ins a week apart. A slope variance of
/// [`DIFFUSE_KAPPA`] instead (1000 kg/d) made the smoother's first steps subtract numbers of
/// 10⁹ kg² to leave a variance of about 0.1: the band of the first week came out of no width
/// (clamped at zero), and between two clinic weigh-ins four weeks apart as 6.8–191.3 kg.
pub const SLOPE_PRIOR_VAR: f64 = 1.0;

/// Number of leading observations treated as the diffuse part of the likelihood (the state has
/// two elements, so the first two innovations carry the prior, not the data's fit).
pub const DIFFUSE_OBSERVATIONS: usize = 2;

/// z quantile of the standard normal for a two-sided 95 % interval.
pub const Z_95: f64 = 1.959_963_984_540_054;

/// Bounds on the measurement-noise SD σ_ε, kg.
///
/// # Remarks
/// Program configuration, not literature constants: a single morning weight's SD is
/// usually put at 0.5–1.0 kg (from memory). 0.2 kg is below any home scale's day-to-day
/// variation; 2.0 kg is beyond what a person's fluid swings produce, so an estimate outside is a
/// symptom of too few data or of unscreened errors, and is clamped.
pub const SIGMA_EPS_BOUNDS_KG: (f64, f64) = (0.2, 2.0);

/// Measurement-noise SD used when there are too few observations to estimate it, kg
/// (middle of the 0.5–1.0 kg range usually quoted; from memory / program choice).
pub const DEFAULT_SIGMA_EPS_KG: f64 = 0.7;

/// Signal-to-noise ratio r = q/σ²_ε (1/d³) used when there are too few observations to estimate
/// it (program choice: over 30 days the slope may drift by about ±0.03 kg/d at σ_ε = 0.7 kg).
pub const DEFAULT_SNR: f64 = 1e-4;

/// Model variances.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LltParams {
    /// Measurement-noise variance σ²_ε, kg².
    pub sigma2_eps: f64,
    /// Slope-disturbance intensity q, kg²/d³ (variance of the slope's change over Δ days is q·Δ).
    pub q: f64,
}

/// Prior mean and covariance of the state at the first time step.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct StatePrior {
    /// Prior mean `[level, slope]`.
    pub mean: Vec2,
    /// Prior covariance.
    pub cov: Mat2,
}

impl StatePrior {
    /// The prior of a weight record: a diffuse level ([`DIFFUSE_KAPPA`]) at `level` and a slope
    /// of 0 with variance [`SLOPE_PRIOR_VAR`].
    pub fn weight_start(level: f64) -> Self {
        StatePrior {
            mean: [level, 0.0],
            cov: [[DIFFUSE_KAPPA, 0.0], [0.0, SLOPE_PRIOR_VAR]],
        }
    }

    /// A diffuse prior: mean `[level, 0]`, covariance `kappa·I`.
    pub fn diffuse(level: f64, kappa: f64) -> Self {
        StatePrior {
            mean: [level, 0.0],
            cov: [[kappa, 0.0], [0.0, kappa]],
        }
    }
}

/// Transition matrix for a gap of `delta` days.
///
/// # Formula
/// `T(Δ) = [[1, Δ], [0, 1]]` (Durbin & Koopman 2012, *Time Series Analysis by State Space
/// Methods*, 2nd ed.; from memory).
pub fn transition(delta: f64) -> Mat2 {
    [[1.0, delta], [0.0, 1.0]]
}

/// Process-noise covariance for a gap of `delta` days.
///
/// # Formula
/// `Q(Δ) = q·[[Δ³/3, Δ²/2], [Δ²/2, Δ]]` (integrated random walk; Durbin &
/// Koopman 2012, from memory).
///
/// # Remarks
/// `Q(0)` is zero: two observations at the same time see the same state.
pub fn process_noise(delta: f64, q: f64) -> Mat2 {
    let d2 = delta * delta;
    [
        [q * d2 * delta / 3.0, q * d2 / 2.0],
        [q * d2 / 2.0, q * delta],
    ]
}

fn mat_mul(a: &Mat2, b: &Mat2) -> Mat2 {
    [
        [
            a[0][0] * b[0][0] + a[0][1] * b[1][0],
            a[0][0] * b[0][1] + a[0][1] * b[1][1],
        ],
        [
            a[1][0] * b[0][0] + a[1][1] * b[1][0],
            a[1][0] * b[0][1] + a[1][1] * b[1][1],
        ],
    ]
}

fn transpose(a: &Mat2) -> Mat2 {
    [[a[0][0], a[1][0]], [a[0][1], a[1][1]]]
}

fn mat_add(a: &Mat2, b: &Mat2) -> Mat2 {
    [
        [a[0][0] + b[0][0], a[0][1] + b[0][1]],
        [a[1][0] + b[1][0], a[1][1] + b[1][1]],
    ]
}

fn mat_sub(a: &Mat2, b: &Mat2) -> Mat2 {
    [
        [a[0][0] - b[0][0], a[0][1] - b[0][1]],
        [a[1][0] - b[1][0], a[1][1] - b[1][1]],
    ]
}

fn mat_vec(a: &Mat2, v: &Vec2) -> Vec2 {
    [
        a[0][0] * v[0] + a[0][1] * v[1],
        a[1][0] * v[0] + a[1][1] * v[1],
    ]
}

fn symmetrize(a: Mat2) -> Mat2 {
    let off = 0.5 * (a[0][1] + a[1][0]);
    [[a[0][0], off], [off, a[1][1]]]
}

fn inverse(a: &Mat2) -> Option<Mat2> {
    let det = a[0][0] * a[1][1] - a[0][1] * a[1][0];
    if !det.is_finite() || det.abs() < f64::MIN_POSITIVE {
        return None;
    }
    Some([
        [a[1][1] / det, -a[0][1] / det],
        [-a[1][0] / det, a[0][0] / det],
    ])
}

/// What happened to the observation (if any) at one filter step.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum StepStatus {
    /// No observation at this step (prediction only).
    NoObservation,
    /// The observation updated the state.
    Used,
    /// The observation's standardized innovation exceeded the outlier limit: it was skipped.
    Outlier,
}

/// One step of the Kalman filter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FilterStep {
    /// Time of the step, days.
    pub t: f64,
    /// One-step prediction `a⁻`.
    pub predicted_mean: Vec2,
    /// Its covariance `P⁻`.
    pub predicted_cov: Mat2,
    /// Filtered state `a` (equals the prediction when nothing was used).
    pub filtered_mean: Vec2,
    /// Its covariance `P`.
    pub filtered_cov: Mat2,
    /// Innovation `v = y − μ⁻` (0 without an observation).
    pub innovation: f64,
    /// Innovation variance `F = P⁻₁₁ + σ²_ε` (0 without an observation).
    pub innovation_var: f64,
    /// Whether the observation was used.
    pub status: StepStatus,
}

/// Outlier screening rule for the filter.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct OutlierScreen {
    /// Limit on `|v|/√F`; an observation beyond it is skipped (the step becomes a prediction).
    pub z: f64,
}

/// Result of a filter pass.
#[derive(Debug, Clone, PartialEq)]
pub struct FilterRun {
    /// One entry per time step.
    pub steps: Vec<FilterStep>,
    /// Log-likelihood by the prediction-error decomposition, diffuse part excluded; skipped
    /// outliers contribute their capped term (see [`kalman_filter`]).
    pub log_likelihood: f64,
    /// Number of terms in `log_likelihood`.
    pub likelihood_terms: usize,
    /// Number of observations skipped as outliers.
    pub outliers: usize,
}

/// Running sums of one filter pass (what the likelihood needs, without storing the steps).
#[derive(Debug, Clone, Copy, Default)]
struct LikSums {
    sum_log_f: f64,
    sum_v2_over_f_kept: f64,
    kept: usize,
    skipped: usize,
}

/// The core recursion; `on_step` sees every step. Returns the likelihood sums.
fn filter_core(
    times: &[f64],
    values: &[Option<f64>],
    control: Option<&[Vec2]>,
    params: LltParams,
    prior: StatePrior,
    screen: Option<OutlierScreen>,
    mut on_step: impl FnMut(FilterStep),
) -> LikSums {
    let mut sums = LikSums::default();
    let mut a = prior.mean;
    let mut p = prior.cov;
    let mut prev_t: Option<f64> = None;
    let mut seen = 0usize;
    for (i, (&t, &y)) in times.iter().zip(values).enumerate() {
        // Predict (the first step uses the prior as its prediction). T P Tᵀ + Q written out for
        // T = [[1, Δ], [0, 1]]: this loop runs ~30 times per participant during estimation.
        let (a_pred, p_pred) = match prev_t {
            None => (a, p),
            Some(t0) => {
                let d = t - t0;
                let qd = params.q * d;
                let u = control.map_or([0.0, 0.0], |c| c[i]);
                let a_pred = [a[0] + d * a[1] + u[0], a[1] + u[1]];
                let p01 = p[0][1] + d * p[1][1] + qd * d / 2.0;
                let p00 = p[0][0] + d * (2.0 * p[0][1] + d * p[1][1]) + qd * d * d / 3.0;
                let p11 = p[1][1] + qd;
                (a_pred, [[p00, p01], [p01, p11]])
            }
        };
        prev_t = Some(t);
        let mut step = FilterStep {
            t,
            predicted_mean: a_pred,
            predicted_cov: p_pred,
            filtered_mean: a_pred,
            filtered_cov: p_pred,
            innovation: 0.0,
            innovation_var: 0.0,
            status: StepStatus::NoObservation,
        };
        if let Some(y) = y {
            let v = y - a_pred[0];
            let f = p_pred[0][0] + params.sigma2_eps;
            step.innovation = v;
            step.innovation_var = f;
            let diffuse = seen < DIFFUSE_OBSERVATIONS;
            seen += 1;
            let outlier = !diffuse && screen.is_some_and(|s| v * v > s.z * s.z * f);
            if outlier {
                step.status = StepStatus::Outlier;
                sums.skipped += 1;
                sums.sum_log_f += f.ln();
            } else {
                // P − K Z P written so that the level variance needs no subtraction
                // (1 − P⁻₁₁/F = σ²_ε/F): with a diffuse prior P⁻₁₁ ≈ F ≈ κ and the naive
                // difference would lose the digits that matter.
                let r = params.sigma2_eps / f;
                let k = [p_pred[0][0] / f, p_pred[1][0] / f];
                let a_new = [a_pred[0] + k[0] * v, a_pred[1] + k[1] * v];
                let p00 = p_pred[0][0] * r;
                let p01 = p_pred[0][1] * r;
                let p11 = p_pred[1][1] - p_pred[0][1] * p_pred[0][1] / f;
                let p_new = [[p00, p01], [p01, p11]];
                step.filtered_mean = a_new;
                step.filtered_cov = p_new;
                step.status = StepStatus::Used;
                if !diffuse {
                    sums.kept += 1;
                    sums.sum_log_f += f.ln();
                    sums.sum_v2_over_f_kept += v * v / f;
                }
            }
        }
        a = step.filtered_mean;
        p = step.filtered_cov;
        on_step(step);
    }
    sums
}

fn log_lik_from_sums(s: &LikSums, z_cap: f64) -> f64 {
    let m = (s.kept + s.skipped) as f64;
    -0.5 * (m * (2.0 * std::f64::consts::PI).ln()
        + s.sum_log_f
        + s.sum_v2_over_f_kept
        + s.skipped as f64 * z_cap * z_cap)
}

/// Kalman filter for the local linear trend model on arbitrary, increasing times.
///
/// `times` are days (increasing; equal times are allowed and give Δ = 0), `values[i]` the
/// observation at `times[i]` or `None` for a prediction-only step.
///
/// # Formula
/// Predict `a⁻ = T a`, `P⁻ = T P Tᵀ + Q`; with `Z = [1, 0]`: `v = y − Z a⁻`,
/// `F = Z P⁻ Zᵀ + σ²_ε`, `K = P⁻ Zᵀ / F`, `a = a⁻ + K v`, `P = P⁻ − K Z P⁻`
/// (Durbin & Koopman 2012), written element-wise as `P₁₁ = P⁻₁₁·σ²_ε/F`, `P₁₂ = P⁻₁₂·σ²_ε/F`,
/// `P₂₂ = P⁻₂₂ − (P⁻₁₂)²/F` so that a diffuse prior costs no digits in the level variance.
/// Log-likelihood (prediction-error decomposition, Harvey 1989):
/// `ℓ = −½ Σ_{t > d} (ln 2π + ln F_t + v_t²/F_t)`, where the first `d = 2` observations form the
/// diffuse part and are left out.
///
/// # Remarks
/// With `screen`, an observation after the diffuse part whose `|v|/√F` exceeds `z` is skipped
/// (no update); in the likelihood it contributes `−½(ln 2π + ln F + z²)`, i.e. its squared
/// standardized innovation is capped at `z²` (a trimmed, Huber-type likelihood), so that
/// parameter values that skip more observations are not rewarded for it. The first two
/// observations cannot be screened: they define the starting level and slope.
/// Empty input gives an empty run with log-likelihood 0.
pub fn kalman_filter(
    times: &[f64],
    values: &[Option<f64>],
    params: LltParams,
    prior: StatePrior,
    screen: Option<OutlierScreen>,
) -> FilterRun {
    kalman_filter_controlled(times, values, None, params, prior, screen)
}

/// [`kalman_filter`] with a known input: `control[i]` (level, slope) is added to the predicted
/// state of step `i` (`control[0]` is not used), i.e. `a⁻_i = T a_{i−1} + u_i`.
///
/// # Remarks
/// A known input moves the mean only, so the covariances, the smoother gains and the
/// Rauch–Tung–Striebel recursion are unchanged (the smoother reads the stored predictions).
/// `control`, when given, has one entry per time step.
pub fn kalman_filter_controlled(
    times: &[f64],
    values: &[Option<f64>],
    control: Option<&[Vec2]>,
    params: LltParams,
    prior: StatePrior,
    screen: Option<OutlierScreen>,
) -> FilterRun {
    if let Some(c) = control {
        assert_eq!(c.len(), times.len(), "one control entry per time step");
    }
    let mut steps = Vec::with_capacity(times.len());
    let sums = filter_core(times, values, control, params, prior, screen, |s| {
        steps.push(s)
    });
    FilterRun {
        steps,
        log_likelihood: log_lik_from_sums(&sums, screen.map_or(0.0, |s| s.z)),
        likelihood_terms: sums.kept + sums.skipped,
        outliers: sums.skipped,
    }
}

/// Smoothed states of one pass (Rauch–Tung–Striebel).
#[derive(Debug, Clone, PartialEq)]
pub struct SmoothedRun {
    /// The filter pass the smoother ran on.
    pub filter: FilterRun,
    /// Smoothed means `a_{t|n}`, one per step.
    pub mean: Vec<Vec2>,
    /// Smoothed covariances `P_{t|n}`.
    pub cov: Vec<Mat2>,
    /// Smoother gains `J_t = P_{t|t} T(Δ_{t+1})ᵀ (P⁻_{t+1})⁻¹`, one per step (the last is zero).
    pub gain: Vec<Mat2>,
}

/// Rauch–Tung–Striebel fixed-interval smoother over a filter pass.
///
/// # Formula
/// `J_t = P_{t|t} Tᵀ (P⁻_{t+1})⁻¹`, `a_{t|n} = a_{t|t} + J_t (a_{t+1|n} − a⁻_{t+1})`,
/// `P_{t|n} = P_{t|t} + J_t (P_{t+1|n} − P⁻_{t+1}) J_tᵀ` (Durbin & Koopman 2012, in
/// covariance form). The smoothed cross-covariance of two steps `s < e` is
/// `Cov(x_s, x_e | y) = J_s J_{s+1} ⋯ J_{e−1} P_{e|n}` ([`SmoothedRun::cross_cov`]).
///
/// # Remarks
/// O(n). A singular `P⁻` (only possible with q = 0 and no prior variance) gives a zero gain,
/// i.e. the filtered state is kept.
pub fn rts_smoother(filter: FilterRun) -> SmoothedRun {
    let n = filter.steps.len();
    let mut mean = vec![[0.0; 2]; n];
    let mut cov = vec![[[0.0; 2]; 2]; n];
    let mut gain = vec![[[0.0; 2]; 2]; n];
    if n == 0 {
        return SmoothedRun {
            filter,
            mean,
            cov,
            gain,
        };
    }
    mean[n - 1] = filter.steps[n - 1].filtered_mean;
    cov[n - 1] = filter.steps[n - 1].filtered_cov;
    for t in (0..n - 1).rev() {
        let cur = &filter.steps[t];
        let next = &filter.steps[t + 1];
        let tm = transition(next.t - cur.t);
        let j = match inverse(&next.predicted_cov) {
            Some(inv) => mat_mul(&mat_mul(&cur.filtered_cov, &transpose(&tm)), &inv),
            None => [[0.0; 2]; 2],
        };
        let dm = [
            mean[t + 1][0] - next.predicted_mean[0],
            mean[t + 1][1] - next.predicted_mean[1],
        ];
        let corr = mat_vec(&j, &dm);
        mean[t] = [
            cur.filtered_mean[0] + corr[0],
            cur.filtered_mean[1] + corr[1],
        ];
        let dp = mat_sub(&cov[t + 1], &next.predicted_cov);
        cov[t] = symmetrize(mat_add(
            &cur.filtered_cov,
            &mat_mul(&mat_mul(&j, &dp), &transpose(&j)),
        ));
        gain[t] = j;
    }
    SmoothedRun {
        filter,
        mean,
        cov,
        gain,
    }
}

impl SmoothedRun {
    /// Smoothed cross-covariance `Cov(x_s, x_e | all data)` for steps `s ≤ e`.
    ///
    /// # Formula
    /// `J_s J_{s+1} ⋯ J_{e−1} P_{e|n}` (lag-covariance of the RTS smoother; for `s = e`, `P_{e|n}`).
    ///
    /// # Remarks
    /// O(e − s). Panics if `e` is out of range or `s > e` (a programming error).
    pub fn cross_cov(&self, s: usize, e: usize) -> Mat2 {
        assert!(
            s <= e && e < self.cov.len(),
            "cross_cov({s}, {e}) out of range"
        );
        let mut acc = self.cov[e];
        for k in (s..e).rev() {
            acc = mat_mul(&self.gain[k], &acc);
        }
        acc
    }

    /// Mean slope between steps `s < e`: `(μ_e − μ_s)/(t_e − t_s)` with its standard deviation.
    ///
    /// # Formula
    /// `Var = (P_{s|n,11} + P_{e|n,11} − 2·Cov(μ_s, μ_e | y)) / (t_e − t_s)²`, the cross term
    /// from [`SmoothedRun::cross_cov`]. Under the model `μ_e − μ_s = ∫ ν dt`, so this is the
    /// time-average of the slope over the window, with its exact smoothed variance.
    ///
    /// # Remarks
    /// Returns `None` when `s >= e` or the times coincide.
    pub fn mean_slope(&self, s: usize, e: usize) -> Option<(f64, f64)> {
        if s >= e || e >= self.mean.len() {
            return None;
        }
        let span = self.filter.steps[e].t - self.filter.steps[s].t;
        if span <= 0.0 {
            return None;
        }
        // Only Cov(μ_s, μ_e) is needed: carry the first row of J_s ⋯ J_{e−1} (half the work
        // of the full product; this runs once per sliding window).
        let mut row = [1.0, 0.0];
        for g in &self.gain[s..e] {
            row = [
                row[0] * g[0][0] + row[1] * g[1][0],
                row[0] * g[0][1] + row[1] * g[1][1],
            ];
        }
        let cov_se = row[0] * self.cov[e][0][0] + row[1] * self.cov[e][1][0];
        let var = (self.cov[s][0][0] + self.cov[e][0][0] - 2.0 * cov_se).max(0.0);
        Some((
            (self.mean[e][0] - self.mean[s][0]) / span,
            var.sqrt() / span,
        ))
    }
}

/// How the variances were obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum FitMethod {
    /// Both σ²_ε and q by maximum likelihood.
    MaximumLikelihood,
    /// q fixed at `DEFAULT_SNR·σ²_ε`, σ²_ε by maximum likelihood (too few observations for both).
    NoiseOnly,
    /// Both fixed at defaults (fewer than 5 observations).
    Defaults,
}

/// Result of [`estimate_params`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ParamFit {
    /// Estimated variances.
    pub params: LltParams,
    /// Profile log-likelihood at the estimate (0 for [`FitMethod::Defaults`]).
    pub log_likelihood: f64,
    /// How they were obtained.
    pub method: FitMethod,
}

/// Robust preliminary noise SD from successive differences, kg.
///
/// # Formula
/// `σ₀ = 1.4826 · median(|d_i − median(d)|) / √2`, `d_i = y_{i+1} − y_i` (MAD of first
/// differences, the usual robust noise scale; common practice), clamped to [`SIGMA_EPS_BOUNDS_KG`].
///
/// # Remarks
/// Fewer than 3 differences give [`DEFAULT_SIGMA_EPS_KG`]. It sets the scale the outlier
/// screen uses while the variances are being estimated.
pub fn robust_noise_sd(values: &[f64]) -> f64 {
    if values.len() < 4 {
        return DEFAULT_SIGMA_EPS_KG;
    }
    let mut d: Vec<f64> = values.windows(2).map(|w| w[1] - w[0]).collect();
    let med = median_in_place(&mut d);
    let mut dev: Vec<f64> = d.iter().map(|x| (x - med).abs()).collect();
    let mad = median_in_place(&mut dev);
    let (lo, hi) = SIGMA_EPS_BOUNDS_KG;
    (1.4826 * mad / std::f64::consts::SQRT_2).clamp(lo, hi)
}

pub(crate) fn median_in_place(x: &mut [f64]) -> f64 {
    x.sort_by(f64::total_cmp);
    let n = x.len();
    if n == 0 {
        f64::NAN
    } else if n % 2 == 1 {
        x[n / 2]
    } else {
        0.5 * (x[n / 2 - 1] + x[n / 2])
    }
}

/// Profile log-likelihood at signal-to-noise ratio `r = q/σ²_ε`, with σ²_ε concentrated out.
/// Returns (ℓ, σ̂²).
fn profile(
    times: &[f64],
    values: &[Option<f64>],
    control: Option<&[Vec2]>,
    r: f64,
    sigma0: f64,
    z: f64,
) -> (f64, f64) {
    let s0 = sigma0 * sigma0;
    let prior = StatePrior::weight_start(first_value(values));
    let sums = filter_core(
        times,
        values,
        control,
        LltParams {
            sigma2_eps: s0,
            q: r * s0,
        },
        prior,
        Some(OutlierScreen { z }),
        |_| {},
    );
    let (lo, hi) = SIGMA_EPS_BOUNDS_KG;
    let c = if sums.kept > 0 {
        sums.sum_v2_over_f_kept / sums.kept as f64
    } else {
        1.0
    };
    let c = c.clamp(lo * lo / s0, hi * hi / s0);
    // Rescaling every variance by c leaves v unchanged and multiplies each F by c.
    let m = (sums.kept + sums.skipped) as f64;
    let ll = -0.5
        * (m * (2.0 * std::f64::consts::PI).ln()
            + sums.sum_log_f
            + m * c.ln()
            + sums.sum_v2_over_f_kept / c
            + sums.skipped as f64 * z * z);
    (ll, c * s0)
}

fn first_value(values: &[Option<f64>]) -> f64 {
    values.iter().flatten().next().copied().unwrap_or(0.0)
}

/// Estimates σ²_ε and q by maximum likelihood.
///
/// # Formula
/// The variances are written `σ²_ε` and `q = r·σ²_ε`. For fixed `r`, scaling every variance by
/// `c` leaves the innovations unchanged and multiplies every `F_t` by `c`, so σ²_ε has the closed
/// form `σ̂²(r) = mean(v_t²/F*_t)` over the non-diffuse, non-skipped innovations (F* computed at
/// unit scale), clamped to the bounds [`SIGMA_EPS_BOUNDS_KG`] (the profile is unimodal in σ², so
/// clamping gives the constrained maximum). `r` is then chosen by maximising the profile
/// log-likelihood over `log10 r ∈ [−9, −1]` on a one-decade grid (9 points), refined by 10
/// golden-section steps between the neighbours of the best grid point (to ±0.02 decade).
///
/// # Remarks
/// The outlier screen inside the likelihood uses the robust preliminary scale
/// [`robust_noise_sd`] of the observed values, so that an outlier cannot inflate the scale
/// that is meant to catch it. Fewer than 10 observations (8 non-diffuse innovations) are too
/// few to estimate both variances: then r = [`DEFAULT_SNR`] and only σ²_ε is estimated; fewer
/// than 5 observations use both defaults. About 21 filter passes over the observation times.
pub fn estimate_params(times: &[f64], values: &[Option<f64>], outlier_z: f64) -> ParamFit {
    estimate_params_controlled(times, values, None, -1.0, outlier_z)
}

/// [`estimate_params`] for the model with a known input (see [`kalman_filter_controlled`]),
/// with `log10 r` searched up to `max_log10_r` (at most −1, at least −9).
pub fn estimate_params_controlled(
    times: &[f64],
    values: &[Option<f64>],
    control: Option<&[Vec2]>,
    max_log10_r: f64,
    outlier_z: f64,
) -> ParamFit {
    let max_log10_r = max_log10_r.clamp(-9.0, -1.0);
    let default_snr = DEFAULT_SNR.min(10f64.powf(max_log10_r));
    let observed: Vec<f64> = values.iter().flatten().copied().collect();
    let n = observed.len();
    let sigma0 = robust_noise_sd(&observed);
    if n < 5 {
        let s2 = DEFAULT_SIGMA_EPS_KG * DEFAULT_SIGMA_EPS_KG;
        return ParamFit {
            params: LltParams {
                sigma2_eps: s2,
                q: default_snr * s2,
            },
            log_likelihood: 0.0,
            method: FitMethod::Defaults,
        };
    }
    if n < 10 {
        let (ll, s2) = profile(times, values, control, default_snr, sigma0, outlier_z);
        return ParamFit {
            params: LltParams {
                sigma2_eps: s2,
                q: default_snr * s2,
            },
            log_likelihood: ll,
            method: FitMethod::NoiseOnly,
        };
    }
    let eval = |log_r: f64| profile(times, values, control, 10f64.powf(log_r), sigma0, outlier_z);
    let grid: Vec<f64> = (0..9)
        .map(|i| -9.0 + i as f64)
        .filter(|&g| g <= max_log10_r)
        .collect();
    let mut best = (f64::NEG_INFINITY, 0usize);
    for (i, &g) in grid.iter().enumerate() {
        let (ll, _) = eval(g);
        if ll > best.0 {
            best = (ll, i);
        }
    }
    let mut lo = grid[best.1.saturating_sub(1)];
    let mut hi = grid[(best.1 + 1).min(grid.len() - 1)];
    let ratio = (5f64.sqrt() - 1.0) / 2.0;
    let mut x1 = hi - ratio * (hi - lo);
    let mut x2 = lo + ratio * (hi - lo);
    let mut f1 = eval(x1).0;
    let mut f2 = eval(x2).0;
    for _ in 0..10 {
        if f1 > f2 {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - ratio * (hi - lo);
            f1 = eval(x1).0;
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + ratio * (hi - lo);
            f2 = eval(x2).0;
        }
    }
    // Keep the grid point if the refinement did not beat it (a boundary optimum).
    let (x_best, ll_best) = if f1.max(f2) >= best.0 {
        if f1 > f2 { (x1, f1) } else { (x2, f2) }
    } else {
        (grid[best.1], best.0)
    };
    let r = 10f64.powf(x_best);
    let (_, s2) = eval(x_best);
    ParamFit {
        params: LltParams {
            sigma2_eps: s2,
            q: r * s2,
        },
        log_likelihood: ll_best,
        method: FitMethod::MaximumLikelihood,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn q_zero_filter_reproduces_reference_ols() {
        // With q = 0 and a diffuse prior the filter equals OLS (regression value for our
        // implementation of the formula).
        let t = [0.0, 7.0, 14.0, 21.0, 28.0];
        let y = [90.0, 89.4, 89.6, 88.9, 88.7].map(Some);
        let run = kalman_filter(
            &t,
            &y,
            LltParams {
                sigma2_eps: 0.25,
                q: 0.0,
            },
            StatePrior::diffuse(0.0, 1e8),
            None,
        );
        let last = run.steps.last().unwrap();
        assert!((last.filtered_mean[0] - 88.700).abs() < 1e-5);
        assert!((last.filtered_mean[1] + 0.044_285_7).abs() < 1e-5);
        assert!((last.filtered_cov[1][1].sqrt() - 0.022_587_7).abs() < 1e-5);
    }

    /// Weigh-ins 28 days apart on a daily grid (a person weighed only at the clinic): with
    /// the record's prior (slope SD 1 kg/d) every smoothed level has a real, bounded variance.
    /// With a slope prior of 1000 kg/d the first steps subtracted variances of about 10⁹ kg²
    /// and the report showed 6.8–191.3 kg between the first two weigh-ins, and a band of no
    /// width on the first day.
    #[test]
    fn sparse_weigh_ins_give_every_day_a_real_bounded_band() {
        let n = 169;
        let times: Vec<f64> = (0..n).map(|i| i as f64).collect();
        let values: Vec<Option<f64>> = (0..n)
            .map(|i| {
                (i % 28 == 0)
                    .then(|| 100.0 - 0.05 * i as f64 + if i % 56 == 0 { 0.3 } else { -0.3 })
            })
            .collect();
        let s2 = DEFAULT_SIGMA_EPS_KG * DEFAULT_SIGMA_EPS_KG;
        let params = LltParams {
            sigma2_eps: s2,
            q: DEFAULT_SNR * s2,
        };
        let sm = rts_smoother(kalman_filter(
            &times,
            &values,
            params,
            StatePrior::weight_start(100.3),
            None,
        ));
        for (t, c) in sm.cov.iter().enumerate() {
            let sd = c[0][0].sqrt();
            // Between σ_ε / √7 (all seven weigh-ins) and 2 kg.
            assert!(sd > 0.2 && sd < 2.0, "day {t}: level SD {sd}");
        }
        // The first day's band is about as wide as a weigh-in day's in the middle.
        let (first, mid) = (sm.cov[0][0][0].sqrt(), sm.cov[84][0][0].sqrt());
        assert!(first > 0.8 * mid, "{first} vs {mid}");
    }

    #[test]
    fn one_step_of_two_days_equals_two_steps_of_one_day() {
        let p = LltParams {
            sigma2_eps: 0.3,
            q: 0.01,
        };
        let prior = StatePrior::diffuse(80.0, 1e6);
        let a = kalman_filter(
            &[0.0, 1.0, 3.0],
            &[Some(80.0), Some(79.5), Some(79.9)],
            p,
            prior,
            None,
        );
        let b = kalman_filter(
            &[0.0, 1.0, 2.0, 3.0],
            &[Some(80.0), Some(79.5), None, Some(79.9)],
            p,
            prior,
            None,
        );
        let (sa, sb) = (a.steps.last().unwrap(), b.steps.last().unwrap());
        for i in 0..2 {
            assert!((sa.filtered_mean[i] - sb.filtered_mean[i]).abs() < 1e-9);
            for j in 0..2 {
                assert!((sa.filtered_cov[i][j] - sb.filtered_cov[i][j]).abs() < 1e-9);
            }
        }
        assert!((a.log_likelihood - b.log_likelihood).abs() < 1e-9);
    }

    #[test]
    fn a_known_input_over_a_gap_equals_the_daily_steps_it_composes() {
        // Smoothed intake rising 0, 100, 250, 300 kcal/d over days 0–3; weigh-ins on days 0,
        // 1 and 3. The input of the 1 → 3 step must equal the two daily inputs composed.
        let x = [2000.0, 2100.0, 2250.0, 2300.0];
        let beta = 1e-4;
        let p = LltParams {
            sigma2_eps: 0.3,
            q: 0.01,
        };
        let prior = StatePrior::diffuse(80.0, 1e6);
        let gap_t = [0.0, 1.0, 3.0];
        let daily_t = [0.0, 1.0, 2.0, 3.0];
        let gap_u = crate::fast::intake_control(&x, &gap_t, beta);
        let daily_u = crate::fast::intake_control(&x, &daily_t, beta);
        // Slope input of the gap: β(x₃ − x₁); level input: β(x₂ − x₁).
        assert!((gap_u[2][1] - beta * 200.0).abs() < 1e-12);
        assert!((gap_u[2][0] - beta * 150.0).abs() < 1e-12);
        let y = [Some(80.0), Some(79.5), Some(79.9)];
        let a = kalman_filter_controlled(&gap_t, &y, Some(&gap_u), p, prior, None);
        let b = kalman_filter_controlled(
            &daily_t,
            &[y[0], y[1], None, y[2]],
            Some(&daily_u),
            p,
            prior,
            None,
        );
        let (sa, sb) = (a.steps.last().unwrap(), b.steps.last().unwrap());
        for i in 0..2 {
            assert!((sa.filtered_mean[i] - sb.filtered_mean[i]).abs() < 1e-9);
        }
        assert!((a.log_likelihood - b.log_likelihood).abs() < 1e-9);
        // And the input moved the state: without it the last prediction differs.
        let plain = kalman_filter(&gap_t, &y, p, prior, None);
        let d = plain.steps[2].predicted_mean[0] - a.steps[2].predicted_mean[0];
        // (The input raises the slope, so the controlled prediction is higher.)
        assert!(d < -0.01, "{d}");
    }

    #[test]
    fn weights_that_follow_the_input_are_tracked_without_surprise() {
        // Noise-free weights whose slope follows the input exactly: after the diffuse start
        // every innovation is zero, and the smoothed slope is the true one on every day.
        let n = 60;
        let x: Vec<f64> = (0..n)
            .map(|d| 1600.0 + 600.0 * ((d as f64 - 20.0) / 20.0).clamp(0.0, 1.0))
            .collect();
        let beta = 1e-4;
        let slope = |d: usize| -0.1 + beta * (x[d] - x[0]);
        let mut w = vec![90.0];
        for d in 1..n {
            w.push(w[d - 1] + slope(d - 1));
        }
        let t: Vec<f64> = (0..n).map(|d| d as f64).collect();
        let u = crate::fast::intake_control(&x, &t, beta);
        let y: Vec<Option<f64>> = w.iter().map(|&v| Some(v)).collect();
        let p = LltParams {
            sigma2_eps: 0.25,
            q: 1e-6,
        };
        let sm = rts_smoother(kalman_filter_controlled(
            &t,
            &y,
            Some(&u),
            p,
            StatePrior::diffuse(90.0, 1e6),
            None,
        ));
        for s in &sm.filter.steps[2..] {
            assert!(s.innovation.abs() < 1e-6, "{}", s.innovation);
        }
        for d in 0..n - 1 {
            assert!((sm.mean[d][1] - slope(d)).abs() < 1e-6, "day {d}");
        }
    }
}

//! Window verdicts (plateau, loss, regain, insufficient data) over the smoothed trend, and
//! their merging into periods.
//!
//! Every threshold here is **program configuration, not a literature constant**: no
//! consensus definition of a weight-loss plateau exists in the literature (trials such as
//! Thomas et al. 2014, *Am J Clin Nutr* 100:787, describe it only descriptively). The defaults
//! are our program choice: a 28-day window (four whole weeks, so the weekly weight cycle
//! cancels), weigh-ins in at least 3 of the 4 weeks (and at least 8 weigh-in days for a plateau
//! or steady verdict, at least 3 for a loss or rise), an equivalence band
//! of ±0.25 % of body weight per week, and a prior loss of at least 3 % of baseline (common
//! practice; Stevens et al. 2006, *Int J Obes* 30:391, treat <3 % change as maintenance).

use crate::llt::{SmoothedRun, StepStatus, Z_95};

/// Plateau-detection settings (program configuration).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PlateauSettings {
    /// Window length in days (default 28).
    pub window_days: usize,
    /// Minimum number of days with a used weigh-in in a window (default 8).
    pub min_weigh_ins: usize,
    /// Equivalence band δ, % of body weight per week (default 0.25).
    pub band_percent_per_week: f64,
    /// Loss before a window, % of baseline, needed to call a plateau or a regain (default 3).
    pub min_prior_loss_percent: f64,
    /// Factor applied to every slope standard deviation for correlated day-to-day scatter
    /// (1 = independent scatter; see [`ar1_inflation`]).
    pub sd_inflation: f64,
}

impl Default for PlateauSettings {
    fn default() -> Self {
        PlateauSettings {
            window_days: 28,
            min_weigh_ins: 8,
            band_percent_per_week: 0.25,
            min_prior_loss_percent: 3.0,
            sd_inflation: 1.0,
        }
    }
}

/// Verdict on one window.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WindowKind {
    /// Interval of the mean slope inside ±δ after a meaningful loss.
    Plateau,
    /// Interval inside ±δ without a meaningful loss before the window.
    Stable,
    /// Upper bound of the interval below −δ.
    Loss,
    /// Lower bound above +δ after a meaningful loss.
    Regain,
    /// Lower bound above +δ without a meaningful loss before.
    Gain,
    /// Enough data, but the interval straddles a band edge: no verdict.
    Undecided,
    /// Too few weigh-ins, too little spread, or an interval wider than ±2δ.
    InsufficientData,
}

impl WindowKind {
    /// Code used in the `periods` table, for the kinds that appear there.
    pub fn table_code(self) -> Option<&'static str> {
        match self {
            WindowKind::Plateau => Some("plateau"),
            WindowKind::Regain => Some("regain"),
            WindowKind::Loss => Some("loss"),
            WindowKind::InsufficientData => Some("insufficient_data"),
            WindowKind::Stable | WindowKind::Gain | WindowKind::Undecided => None,
        }
    }
}

/// One classified window on the daily grid (indices are grid days, inclusive).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WindowVerdict {
    /// First day index.
    pub start: usize,
    /// Last day index.
    pub end: usize,
    /// Verdict.
    pub kind: WindowKind,
    /// Mean slope over the window, kg/d (NaN when it could not be computed).
    pub slope: f64,
    /// Lower 95 % bound, kg/d.
    pub lower: f64,
    /// Upper 95 % bound, kg/d.
    pub upper: f64,
    /// Band half-width δ used, kg/d.
    pub delta: f64,
}

/// Days with a used weigh-in in `[s, e]` and the number of 7-day blocks (counted from `s`)
/// that hold at least one.
pub fn coverage(has_obs: &[bool], s: usize, e: usize) -> (usize, usize) {
    let mut days = 0;
    let mut blocks: u128 = 0; // bit b set: block b has a weigh-in (windows are ≤ 84 days)
    for (d, &h) in has_obs.iter().enumerate().take(e + 1).skip(s) {
        if h {
            days += 1;
            blocks |= 1u128 << ((d - s) / 7).min(127);
        }
    }
    (days, blocks.count_ones() as usize)
}

/// Classifies the window `[s, e]` of the smoothed daily trend.
///
/// # Formula
/// Mean slope `m = (μ_e − μ_s)/(e − s)` with `SD` from the smoothed states and their lag
/// covariance ([`SmoothedRun::mean_slope`]); interval `m ± 1.96·SD`. Band
/// `δ = band% × μ_e / 7` kg/d. In this order:
/// 1. fewer than 3 weigh-in days, or weigh-ins in fewer than `⌈0.75·B⌉` of the `B = ⌈L/7⌉`
///    weekly blocks (3 of 4 for 28 days) → insufficient data;
/// 2. upper bound `< −δ` → loss;
/// 3. lower bound `> δ` → regain when the largest loss reached up to `s`,
///    `baseline − min_{d≤s} μ_d`, is at least `p% × baseline`; else gain;
///
///    with fewer than `min_weigh_ins` weigh-in days, 2 and 3 also need the least-squares slope
///    of the window's own readings beyond the same band edge with its 95 % interval on that side
///    of zero ([`window_readings_slope`]);
/// 4. fewer than `min_weigh_ins` weigh-in days, or `1.96·SD > 2δ` → insufficient data;
/// 5. interval inside `[−δ, δ]` → plateau when `baseline − μ_s ≥ p% × baseline`, else stable;
/// 6. otherwise undecided.
///
/// # Remarks
/// A loss or rise is a one-sided claim that the whole interval shows; weigh-ins in three weeks
/// of four (weekly weighing) are enough for it. That the weight held inside the band is an
/// equivalence claim, and a narrow interval from a few readings rests on the model more than
/// on them, so it keeps the fuller record (`min_weigh_ins`). The mean slope is taken from the
/// smoother rather than refitted on the window's observations: it uses the model's noise estimate from all data, handles uneven spacing
/// and keeps the plateau verdict consistent with the plotted trend. `min_level_up_to_s` is
/// `min_{d≤s} μ_d`; `baseline` the smoothed level on the first day.
pub fn classify_window(
    sm: &SmoothedRun,
    has_obs: &[bool],
    s: usize,
    e: usize,
    baseline: f64,
    min_level_up_to_s: f64,
    settings: &PlateauSettings,
) -> WindowVerdict {
    let level_e = sm.mean[e][0];
    let delta = settings.band_percent_per_week / 100.0 * level_e / 7.0;
    let mut v = WindowVerdict {
        start: s,
        end: e,
        kind: WindowKind::InsufficientData,
        slope: f64::NAN,
        lower: f64::NAN,
        upper: f64::NAN,
        delta,
    };
    let Some((m, sd)) = sm.mean_slope(s, e) else {
        return v;
    };
    let sd = sd * settings.sd_inflation;
    v.slope = m;
    v.lower = m - Z_95 * sd;
    v.upper = m + Z_95 * sd;
    let (days, blocks_hit) = coverage(has_obs, s, e);
    let blocks = (e - s + 1).div_ceil(7);
    let blocks_needed = (0.75 * blocks as f64).ceil() as usize;
    if days < MIN_DIRECTION_WEIGH_INS || blocks_hit < blocks_needed {
        return v;
    }
    let loss_needed = settings.min_prior_loss_percent / 100.0 * baseline;
    // A direction shown by the whole interval needs only weigh-ins spread over the window; with
    // fewer than `min_weigh_ins` the window's own weigh-ins must show it too.
    let sparse = days < settings.min_weigh_ins;
    let own = || {
        sparse
            .then(|| window_readings_slope(sm, s, e, settings.sd_inflation))
            .flatten()
    };
    if v.upper < -delta && (!sparse || own().is_some_and(|(r, h)| r < -delta && r + h < 0.0)) {
        v.kind = WindowKind::Loss;
        return v;
    }
    if v.lower > delta && (!sparse || own().is_some_and(|(r, h)| r > delta && r - h > 0.0)) {
        v.kind = if baseline - min_level_up_to_s >= loss_needed {
            WindowKind::Regain
        } else {
            WindowKind::Gain
        };
        return v;
    }
    // Weight held inside the band, or no verdict yet, needs the fuller record.
    if sparse || Z_95 * sd > 2.0 * delta {
        return v;
    }
    v.kind = if v.lower >= -delta && v.upper <= delta {
        if baseline - sm.mean[s][0] >= loss_needed {
            WindowKind::Plateau
        } else {
            WindowKind::Stable
        }
    } else {
        WindowKind::Undecided
    };
    v
}

/// Least-squares slope (kg/d) of the weigh-ins the smoother used in `[s, e]` (after source
/// offsets and steps, outliers left out), read back from the filter as prediction +
/// innovation, with the half-width of its 95 % interval: `1.96·σ_ε·infl/√Sxx`, σ²_ε the
/// record's scatter (innovation variance less the predicted level variance) and `infl` the
/// correlated-scatter factor. `None` with fewer than two distinct days.
///
/// # Remarks
/// With few weigh-ins the smoother's interval leans on the model: with readings a week apart,
/// its slope cannot turn between two of them, and the slope's process noise, estimated from
/// the whole record, may be that of weeks of steady loss. After a person stopped, four weekly
/// readings that had turned upward still gave a loss whose whole interval lay below the band
/// (validation seed 20261202, person 164, day 119: true change +0.15 kg/week), and a stall
/// weighed weekly after a loss weighed most days was "losing" in 6–13 % of simulated records
/// with no change at all. So a sparse window's readings must show the direction themselves,
/// at 97.5 % one-sided, with a pace beyond the band ([`classify_window`]): the rule for a pace
/// the smoother's interval does not place wholly beyond the band (`status_code` in `lib.rs`).
fn window_readings_slope(sm: &SmoothedRun, s: usize, e: usize, infl: f64) -> Option<(f64, f64)> {
    let used: Vec<(f64, f64)> = sm.filter.steps[s..=e]
        .iter()
        .filter(|st| st.status == StepStatus::Used)
        .map(|st| (st.t, st.predicted_mean[0] + st.innovation))
        .collect();
    let sigma2 = sm.filter.steps[s..=e]
        .iter()
        .filter(|st| st.status == StepStatus::Used)
        .map(|st| st.innovation_var - st.predicted_cov[0][0])
        .fold(f64::NAN, f64::max);
    let n = used.len() as f64;
    let tm = used.iter().map(|p| p.0).sum::<f64>() / n;
    let ym = used.iter().map(|p| p.1).sum::<f64>() / n;
    let (sxy, sxx) = used.iter().fold((0.0, 0.0), |(a, b), &(t, y)| {
        (a + (t - tm) * (y - ym), b + (t - tm) * (t - tm))
    });
    (sxx > 0.0 && sigma2.is_finite())
        .then(|| (sxy / sxx, Z_95 * infl * (sigma2.max(0.0) / sxx).sqrt()))
}

/// Fewest weigh-in days in a window for a loss or rise verdict (program choice: with three, a
/// single reading far off its neighbours is seen as such by the smoother's noise estimate from
/// the whole record, as it is not with two, where the line runs through both).
const MIN_DIRECTION_WEIGH_INS: usize = 3;

/// A merged period of consecutive windows of one kind.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Period {
    /// Kind (one with a [`WindowKind::table_code`]).
    pub kind: WindowKind,
    /// First day index.
    pub start: usize,
    /// Last day index.
    pub end: usize,
    /// Mean slope over the whole period, kg/d, with its 95 % interval.
    pub slope: f64,
    /// Lower bound, kg/d.
    pub lower: f64,
    /// Upper bound, kg/d.
    pub upper: f64,
    /// For plateaus: probability (0–1) that the period's mean slope lies inside the band, under
    /// the model's normal approximation; NaN for other kinds.
    pub confidence: f64,
}

/// Classifies every full window (one per end day) and merges runs of consecutive windows of
/// the same table kind into periods, sorted by start.
///
/// # Remarks
/// Consecutive sliding windows overlap, so a run of them covers `[first start, last end]`;
/// the period's slope and interval are recomputed over that whole span from the smoother.
/// Periods of different kinds may overlap at their edges (a loss window and the plateau window
/// that follows share days). Fewer grid days than one window give no periods.
///
/// Plateaus are searched on `tissue` when given (the trend of the weigh-ins with the fast
/// glycogen/water weight taken out, [`crate::fast`]) and on `sm` otherwise.
pub fn find_periods(
    sm: &SmoothedRun,
    tissue: Option<&SmoothedRun>,
    has_obs: &[bool],
    settings: &PlateauSettings,
) -> Vec<Period> {
    let n = sm.mean.len();
    let l = settings.window_days.max(2);
    if n < l {
        return Vec::new();
    }
    let baseline = sm.mean[0][0];
    // Running minimum of the level up to each day.
    let mut run_min = Vec::with_capacity(n);
    let mut cur = f64::INFINITY;
    for m in &sm.mean {
        cur = cur.min(m[0]);
        run_min.push(cur);
    }
    let mut periods: Vec<Period> = Vec::new();
    let mut open: Option<(WindowKind, usize, usize)> = None;
    let close = |k: WindowKind, s: usize, e: usize, periods: &mut Vec<Period>| {
        let (slope, lower, upper) = match sm.mean_slope(s, e) {
            Some((m, sd)) => {
                let sd = sd * settings.sd_inflation;
                (m, m - Z_95 * sd, m + Z_95 * sd)
            }
            None => (f64::NAN, f64::NAN, f64::NAN),
        };
        periods.push(Period {
            kind: k,
            start: s,
            end: e,
            slope,
            lower,
            upper,
            confidence: f64::NAN,
        });
    };
    for e in (l - 1)..n {
        let s = e + 1 - l;
        let v = classify_window(sm, has_obs, s, e, baseline, run_min[s], settings);
        // Plateaus are found on the whole smoothed trajectory ([`plateau_runs`]), not window
        // by window, so that their onset is where the trend entered the band.
        let kind = v
            .kind
            .table_code()
            .filter(|_| v.kind != WindowKind::Plateau)
            .map(|_| v.kind);
        match (open, kind) {
            (Some((k, ps, _)), Some(nk)) if k == nk => open = Some((k, ps, e)),
            (o, nk) => {
                if let Some((k, ps, pe)) = o {
                    close(k, ps, pe, &mut periods);
                }
                open = nk.map(|k| (k, s, e));
            }
        }
    }
    if let Some((k, ps, pe)) = open {
        close(k, ps, pe, &mut periods);
    }
    periods.extend(plateau_runs(tissue.unwrap_or(sm), has_obs, settings));
    periods.sort_by_key(|p| (p.start, p.end));
    periods
}

/// Confidence a run needs to be reported as a plateau; below it the run is
/// `insufficient_data` (program choice: four to one that the run's mean slope lies in the band.
/// On the project's simulated cohorts 0.5 → 0.8 cut plateaus reported without a true one from
/// about 16 % to 11 % and lost about one true onset in a hundred; VALIDATION.md).
pub const PLATEAU_CONFIDENCE: f64 = 0.8;

/// Shortest stretch of days inside the band that counts as the trend being in it, days.
const MIN_STRETCH_DAYS: usize = 7;

/// Standard normal CDF Φ(x), from the complementary error function approximation of
/// Abramowitz & Stegun 1964, *Handbook of Mathematical Functions*, 7.1.26 (|error| < 1.5·10⁻⁷).
pub fn normal_cdf(x: f64) -> f64 {
    let z = x.abs() / std::f64::consts::SQRT_2;
    let t = 1.0 / (1.0 + 0.327_591_1 * z);
    let poly = t
        * (0.254_829_592
            + t * (-0.284_496_736
                + t * (1.421_413_741 + t * (-1.453_152_027 + t * 1.061_405_429))));
    let erfc = poly * (-z * z).exp();
    if x >= 0.0 {
        1.0 - 0.5 * erfc
    } else {
        0.5 * erfc
    }
}

/// Probability that a normal quantity with mean `m` and SD `sd` lies in `[−delta, delta]`.
pub fn prob_inside(m: f64, sd: f64, delta: f64) -> f64 {
    if sd.is_nan() || sd <= 0.0 {
        return if m.abs() <= delta { 1.0 } else { 0.0 };
    }
    (normal_cdf((delta - m) / sd) - normal_cdf((-delta - m) / sd)).clamp(0.0, 1.0)
}

/// Variance-inflation factor for slopes when day-to-day scatter is AR(1) with lag-one
/// autocorrelation `r`: √((1 + r)/(1 − r)), the usual large-sample factor for the variance of a
/// mean or trend under AR(1) errors (e.g. Box, Jenkins & Reinsel, *Time Series Analysis*, 4th
/// ed. 2008; from memory). `r` is held to [0, 0.8].
pub fn ar1_inflation(r: f64) -> f64 {
    let r = if r.is_finite() {
        r.clamp(0.0, 0.8)
    } else {
        0.0
    };
    ((1.0 + r) / (1.0 - r)).sqrt()
}

/// Plateaus found retrospectively on the smoothed trajectory.
///
/// # Method
/// 1. For every day t the mean slope of the smoothed trend over the centred window
///    `[t − L/2, t + L/2 − 1]` (cut at the ends of the data, at least 14 days) is compared with
///    the band `±δ_t` (δ_t = band % × μ_t / 7). Centring makes the window's verdict describe day
///    t itself, so the first day inside the band is where the trend entered it.
/// 2. Days inside the band form runs; runs separated by fewer than 7 days outside are joined
///    (a brief excursion does not end a plateau).
/// 3. A run is a candidate when it lasts at least `window_days` (three quarters of that when it
///    reaches the last day, which is still going on) and the loss reached by its first day —
///    baseline level minus the lowest level so far — is at least `min_prior_loss_percent` of
///    baseline. Its **onset** is the run's first day.
/// 4. Confidence = P(mean slope over the run ∈ [−δ, δ]) under the smoother's normal
///    approximation (SD × `sd_inflation`). With at least 3 weigh-in days in the run and
///    confidence ≥ [`PLATEAU_CONFIDENCE`] the run is a `plateau`; otherwise the data cannot
///    tell a plateau from a slow change and the run is `insufficient_data`.
///
/// `sm` is normally the trend of the weigh-ins minus the fast glycogen/water weight the food
/// log implies ([`crate::fast`]): a plateau is a stall of tissue loss, and water refilling as
/// intake drifts up flattens the scale weeks before tissue loss stops.
///
/// The defaults are program configuration (no consensus definition of a plateau
/// exists in the literature).
pub fn plateau_runs(sm: &SmoothedRun, has_obs: &[bool], settings: &PlateauSettings) -> Vec<Period> {
    let n = sm.mean.len();
    if n < 14 {
        return Vec::new();
    }
    let delta = |t: usize| settings.band_percent_per_week / 100.0 * sm.mean[t][0] / 7.0;
    let half = (settings.window_days / 2).max(7);
    let inside = |t: usize| -> bool {
        let s = t.saturating_sub(half);
        let e = (t + half - 1).min(n - 1);
        if e - s < 13 {
            return false;
        }
        sm.mean_slope(s, e)
            .is_some_and(|(m, _)| m.abs() <= delta(t))
    };
    // Stretches inside the band; a stretch of fewer than 7 days is a passing wobble of the
    // estimate, not an entry into the band (a noisy slope crosses a threshold first earlier
    // than its mean does), so it neither starts nor joins a run.
    let mut stretches: Vec<(usize, usize)> = Vec::new();
    let mut t = 0;
    while t < n {
        if inside(t) {
            let a = t;
            while t + 1 < n && inside(t + 1) {
                t += 1;
            }
            if t - a + 1 >= MIN_STRETCH_DAYS || t + 1 == n {
                stretches.push((a, t));
            }
        }
        t += 1;
    }
    let mut runs: Vec<(usize, usize)> = Vec::new();
    for (a, b) in stretches {
        match runs.last_mut() {
            Some(last) if a - last.1 - 1 < 7 => last.1 = b,
            _ => runs.push((a, b)),
        }
    }
    let baseline = sm.mean[0][0];
    let loss_needed = settings.min_prior_loss_percent / 100.0 * baseline;
    let mut run_min = Vec::with_capacity(n);
    let mut cur = f64::INFINITY;
    for m in &sm.mean {
        cur = cur.min(m[0]);
        run_min.push(cur);
    }
    let mut out = Vec::new();
    for (a0, b) in runs {
        // The onset is the first day of the run by which the loss has been reached.
        let Some(a) = (a0..=b).find(|&d| baseline - run_min[d] >= loss_needed) else {
            continue;
        };
        let min_len = if b + 1 == n {
            (3 * settings.window_days).div_ceil(4)
        } else {
            settings.window_days
        };
        if b - a + 1 < min_len {
            continue;
        }
        let Some((m, sd)) = sm.mean_slope(a, b) else {
            continue;
        };
        let sd = sd * settings.sd_inflation;
        let d = delta(b);
        let conf = prob_inside(m, sd, d);
        let (days, _) = coverage(has_obs, a, b);
        let kind = if days >= 3 && conf >= PLATEAU_CONFIDENCE {
            WindowKind::Plateau
        } else {
            WindowKind::InsufficientData
        };
        out.push(Period {
            kind,
            start: a,
            end: b,
            slope: m,
            lower: m - Z_95 * sd,
            upper: m + Z_95 * sd,
            confidence: conf,
        });
    }
    out
}

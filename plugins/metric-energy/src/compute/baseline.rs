//! The person's baseline energy requirement EI₀ and under-reporting factor, estimated jointly
//! from the prior, the food logs and the weight trend.

use super::{
    MIN_LOGGED_DAYS, Person, RMR_REL_SD, Settings, Z_95, day_after, days_incl, mean_band,
    window_slope,
};
use chrono::{Datelike as _, NaiveDate};

/// Length of the blocks the record is cut into, days (four whole weeks, so every block holds
/// each weekday equally often).
const BLOCK_DAYS: u64 = 28;
/// Shortest last block kept on its own, days; a shorter tail joins the block before it.
const MIN_BLOCK_DAYS: i64 = 14;
/// Day-to-day coefficient of variation of one logged day: true intake varies from day to day
/// by 15–25 % (Basiotis et al. 1987, J Nutr 117:1638; from memory) and the share left out of
/// the log varies as well; 0.30 together (program choice).
const LOG_DAY_CV: f64 = 0.30;
/// Weight of `LOG_DAY_CV` as a prior on the person's own day-to-day variation, in logged days
/// (program choice).
const LOG_CV_PRIOR_DAYS: f64 = 10.0;
/// SD of the under-reporting share from one four-week block to the next around the person's
/// own share, σ_u. It is not known, so the posterior is averaged over this grid with equal prior
/// weights (a log-uniform prior from a nearly constant share to one that moves by a fifth of
/// intake; the range is a program choice). Reporting is not constant over a program:
/// self-reported intake drifts with an intervention (Natarajan et al. 2010, *Am J Epidemiol*
/// 172:819, from memory), and a log kept at the diet's level while the person eats more again is
/// a known failing of food records (common practice). With one fixed small σ_u, logs that stay
/// flat while the weight trend turns from loss to regain could only be explained by a large
/// requirement and heavy under-reporting (a sedentary man's activity level read as 2.1);
/// averaged over σ_u, the records decide how far the logs' movement can be trusted to track
/// intake.
const UNDERREPORT_BLOCK_SDS: [f64; 5] = [0.03, 0.05, 0.08, 0.13, 0.21];
/// Grid of the joint posterior: EI₀ over the prior's ±`EI0_GRID_SD` SD in `EI0_STEPS` steps,
/// the under-reporting share over [`U_MIN`, `U_MAX`] in steps of `U_STEP`.
const EI0_GRID_SD: f64 = 4.0;
const EI0_STEPS: usize = 121;
const U_MIN: f64 = -0.30;
const U_MAX: f64 = 0.80;
const U_STEP: f64 = 0.01;

/// One block of the record: the mean logged intake with its sampling variance, and the change
/// in intake the weight trend implies (EI = EI₀ + `change`) with its variance.
#[derive(Debug, Clone, Copy)]
pub(super) struct Block {
    pub logged: f64,
    pub logged_var: f64,
    pub change: f64,
    pub change_var: f64,
}

/// Posterior of the baseline requirement and of the under-reporting share.
#[derive(Debug, Clone, Copy)]
pub(super) struct Baseline {
    /// EI₀, kcal/d: posterior mean.
    pub ei0: f64,
    /// Its posterior variance, kcal²/d².
    pub var: f64,
    /// Under-reporting share (0.2 = 20 % of intake missing from the log): posterior mean and
    /// 95 % interval (2.5 % and 97.5 % quantiles), when there were logged blocks.
    pub underreport: Option<(f64, f64, f64)>,
}

/// Mean logged intake over [from, to] balanced over the weekdays (each weekday with a log
/// counts equally, so fewer weekend logs do not pull the mean towards weekday eating), with
/// its sampling variance at day-to-day coefficient of variation `cv` and the number of logged
/// days.
pub(super) fn balanced_log_mean(
    p: &Person<'_>,
    from: NaiveDate,
    to: NaiveDate,
    cv: f64,
) -> Option<(f64, f64, usize)> {
    let mut sum = [0.0_f64; 7];
    let mut n = [0_usize; 7];
    for i in p
        .data
        .intake
        .iter()
        .filter(|i| i.date >= from && i.date <= to)
    {
        let k = i.date.weekday().num_days_from_monday() as usize;
        sum[k] += i.kcal;
        n[k] += 1;
    }
    let total: usize = n.iter().sum();
    let present: Vec<usize> = (0..7).filter(|&k| n[k] > 0).collect();
    if total < MIN_LOGGED_DAYS {
        return None;
    }
    let kf = present.len() as f64;
    let mean = present.iter().map(|&k| sum[k] / n[k] as f64).sum::<f64>() / kf;
    let var =
        (cv * mean).powi(2) * present.iter().map(|&k| 1.0 / n[k] as f64).sum::<f64>() / (kf * kf);
    Some((mean, var, total))
}

/// The blocks of the record from the first trend day to `to`: four-week blocks with at least
/// `MIN_LOGGED_DAYS` logged days and a trend slope over most of the block.
pub(super) fn blocks(p: &Person<'_>, enrolled: NaiveDate, to: NaiveDate) -> Vec<Block> {
    let Some((&first, _)) = p.trend.level.range(enrolled..=to).next() else {
        return vec![];
    };
    let Some((&last, _)) = p.trend.level.range(..=to).next_back() else {
        return vec![];
    };
    let mut bounds = vec![];
    let mut b0 = first;
    while b0 <= last {
        let b1 = day_after(b0, BLOCK_DAYS - 1).min(last);
        bounds.push((b0, b1));
        b0 = day_after(b1, 1);
        if b1 == last {
            break;
        }
    }
    if bounds.len() >= 2
        && let Some(&(_, end)) = bounds.last()
        && days_incl(bounds[bounds.len() - 1].0, end) < MIN_BLOCK_DAYS
    {
        bounds.pop();
        if let Some(prev) = bounds.last_mut() {
            prev.1 = end;
        }
    }
    let sd_of = |l: Option<f64>, u: Option<f64>| match (l, u) {
        (Some(l), Some(u)) => (u - l).abs() / (2.0 * Z_95),
        _ => 0.0,
    };
    let cv = log_day_cv(p, &bounds);
    let mut out = vec![];
    for (b0, b1) in bounds {
        let span = days_incl(b0, b1);
        if span < MIN_BLOCK_DAYS {
            continue;
        }
        let Some((logged, logged_var, _)) = balanced_log_mean(p, b0, b1, cv) else {
            continue;
        };
        let covered = p.trend.slope.range(b0..=b1).count() as i64;
        let (Some(level), Some(slope)) = (
            mean_band(&p.trend.level, b0, b1),
            window_slope(&p.trend, b0, b1),
        ) else {
            continue;
        };
        if covered < span / 2 {
            continue;
        }
        let met = p.activity_met_hours(b0, b1);
        // The first block still holds the diet's fast glycogen/water drop.
        let intake = if (b0 - enrolled).num_days() < 7 {
            p.implied_intake_from_start(level.value, slope.value, met, span as f64)
        } else {
            p.implied_intake(level.value, slope.value, met)
        };
        out.push(Block {
            logged,
            logged_var,
            change: intake - p.model.ei0,
            change_var: p.change_var(level.value, slope.value, sd_of(slope.lower, slope.upper)),
        });
    }
    out
}

/// The person's day-to-day coefficient of variation of logged intake: the pooled relative
/// spread of logged days around their block's mean (degrees of freedom = logged days − blocks),
/// combined with `LOG_DAY_CV` as a prior worth `LOG_CV_PRIOR_DAYS` days.
fn log_day_cv(p: &Person<'_>, bounds: &[(NaiveDate, NaiveDate)]) -> f64 {
    let mut ss = 0.0;
    let mut df = 0.0;
    for &(b0, b1) in bounds {
        let days: Vec<f64> = p
            .data
            .intake
            .iter()
            .filter(|i| i.date >= b0 && i.date <= b1)
            .map(|i| i.kcal)
            .collect();
        if days.len() < 2 {
            continue;
        }
        let m = days.iter().sum::<f64>() / days.len() as f64;
        if m <= 0.0 {
            continue;
        }
        ss += days.iter().map(|x| (x / m - 1.0).powi(2)).sum::<f64>();
        df += (days.len() - 1) as f64;
    }
    ((ss + LOG_CV_PRIOR_DAYS * LOG_DAY_CV * LOG_DAY_CV) / (df + LOG_CV_PRIOR_DAYS)).sqrt()
}

/// The posterior grid's geometry, one definition for the grid's computation and its reading:
/// EI₀ step `i` at `prior ± EI0_GRID_SD · sd0`, share step `j`, and the cell of (block wobble
/// `k`, `i`, `j`) in the flat grid.
struct Grid {
    prior: f64,
    sd0: f64,
}

impl Grid {
    /// Share steps, [`U_MIN`] to [`U_MAX`] in steps of [`U_STEP`].
    const N_U: usize = ((U_MAX - U_MIN) / U_STEP + 0.5) as usize + 1;

    fn ei0(&self, i: usize) -> f64 {
        self.prior + self.sd0 * EI0_GRID_SD * (2.0 * i as f64 / (EI0_STEPS - 1) as f64 - 1.0)
    }

    fn u(j: usize) -> f64 {
        U_MIN + U_STEP * j as f64
    }

    fn cell(k: usize, i: usize, j: usize) -> usize {
        (k * EI0_STEPS + i) * Self::N_U + j
    }
}

/// The joint log posterior (up to a constant) of EI₀ and the under-reporting share over the
/// grid, cell `(k * EI0_STEPS + i) * n_u + j` for block wobble `k`, EI₀ step `i` and share step
/// `j`, with its largest value. `prior`, `sd0`: EI₀'s prior mean and SD; `u_prior`, `u_sd`:
/// the share's.
fn log_posterior_grid(
    blocks: &[Block],
    prior: f64,
    sd0: f64,
    u_prior: f64,
    u_sd: f64,
) -> (Vec<f64>, f64) {
    let grid = Grid { prior, sd0 };
    let (n_u, ei_at, u_at, cell) = (Grid::N_U, |i| grid.ei0(i), Grid::u, Grid::cell);
    let n_k = UNDERREPORT_BLOCK_SDS.len();
    let mut logp = vec![0.0_f64; n_k * EI0_STEPS * n_u];
    let mut best = f64::NEG_INFINITY;
    // Each block's variance depends on u and σ_u only: (1/V, ln V) once per pair.
    let mut inv_ln = vec![(0.0_f64, 0.0_f64); blocks.len()];
    // The EI₀ grid and its prior term, once. For each (σ_u, u) the EI₀ column is summed a
    // block at a time over the whole column (the same operations in the same order for each
    // cell as one cell at a time, so the same bits; independent cells, so the compiler can
    // do two at once).
    let eis: Vec<f64> = (0..EI0_STEPS).map(ei_at).collect();
    let prior_terms: Vec<f64> = eis
        .iter()
        .map(|&ei0| 0.5 * ((ei0 - prior) / sd0).powi(2))
        .collect();
    let mut column = vec![0.0_f64; EI0_STEPS];
    for (k, &wobble) in UNDERREPORT_BLOCK_SDS.iter().enumerate() {
        for j in 0..n_u {
            let u = u_at(j);
            let keep = 1.0 - u;
            let lp_u = -0.5 * ((u - u_prior) / u_sd).powi(2);
            for (b, slot) in blocks.iter().zip(inv_ln.iter_mut()) {
                let v = b.logged_var + keep * keep * b.change_var + (wobble * b.logged).powi(2);
                *slot = (1.0 / v, v.ln());
            }
            for (lp, term) in column.iter_mut().zip(&prior_terms) {
                *lp = lp_u - term;
            }
            for (b, &(inv, ln)) in blocks.iter().zip(&inv_ln) {
                for (lp, &ei0) in column.iter_mut().zip(&eis) {
                    let r = b.logged - keep * (ei0 + b.change);
                    *lp -= 0.5 * (ln + r * r * inv);
                }
            }
            for (i, &lp) in column.iter().enumerate() {
                logp[cell(k, i, j)] = lp;
                best = best.max(lp);
            }
        }
    }
    (logp, best)
}

/// EI₀ and the under-reporting share u from the prior, the food logs and the weight trend.
///
/// # Method
/// Prior: EI₀ ~ N(RMR₀ × `base_pal`, (RMR₀·`base_pal`·r)²) with r = √((`pal_sd`/PAL)² +
/// RMR_REL_SD² + s²), s the relative SD of RMR₀ from a sex not recorded (0 when it is), u ~ N(`underreporting_prior_percent`, `underreporting_sd_percent`), by
/// default 20 % ± 12 points. The record is cut into four-week blocks b; in each
/// the weight trend implies the intake EI₀ + D_b (D_b from the block's mean level and exact
/// slope, [`Person::implied_intake`]) and the log gives the weekday-balanced mean L_b, so
///
/// L_b = (1 − u)·(EI₀ + D_b) + e_b,  Var e_b = σ²_L,b + (1 − u)²·σ²_D,b + (σ_u·L_b)²,
///
/// with σ_L,b the sampling error of the logged mean, σ_D,b the slope's and the model
/// parameters' uncertainty of D_b, and σ_u a block-to-block wobble of the reporting share,
/// itself unknown and averaged over ([`UNDERREPORT_BLOCK_SDS`]).
/// With one block, or blocks whose D_b are alike, the logs fix only the product (1 − u)·EI₀
/// and the prior decides how it is shared; when the implied intake moves between blocks
/// (a diet that fades or stops), the logs moving with it (or not) identify 1 − u as the slope
/// of L_b on D_b. The joint posterior is evaluated on a grid (exact for this three-parameter
/// model; Gelman et al. 2013, *Bayesian Data Analysis*, 3rd ed., ch. 3) and summarised by its
/// marginal means, the variance of EI₀ and the 2.5 % / 97.5 % quantiles of u.
pub(super) fn baseline_requirement(
    p: &Person<'_>,
    s: &Settings,
    enrolled: NaiveDate,
    to: NaiveDate,
) -> Baseline {
    let prior = p.model.ei0;
    let rel =
        ((s.pal_sd / p.model.pal).powi(2) + RMR_REL_SD * RMR_REL_SD + p.sex_rel_sd * p.sex_rel_sd)
            .sqrt();
    let sd0 = prior * rel;
    let fallback = Baseline {
        ei0: prior,
        var: sd0 * sd0,
        underreport: None,
    };
    let blocks = blocks(p, enrolled, to);
    if blocks.is_empty() {
        return fallback;
    }
    let grid = Grid { prior, sd0 };
    let (n_u, ei_at, u_at, cell) = (Grid::N_U, |i| grid.ei0(i), Grid::u, Grid::cell);
    let n_k = UNDERREPORT_BLOCK_SDS.len();
    let (logp, best) =
        log_posterior_grid(&blocks, prior, sd0, s.underreport_prior, s.underreport_sd);
    let mut w_total = 0.0;
    let mut m_e = 0.0;
    let mut m_e2 = 0.0;
    let mut w_u = vec![0.0_f64; n_u];
    for k in 0..n_k {
        for i in 0..EI0_STEPS {
            let ei0 = ei_at(i);
            for j in 0..n_u {
                let w = (logp[cell(k, i, j)] - best).exp();
                w_total += w;
                m_e += w * ei0;
                m_e2 += w * ei0 * ei0;
                w_u[j] += w;
            }
        }
    }
    if !(w_total > 0.0 && w_total.is_finite()) {
        return fallback;
    }
    let mean = m_e / w_total;
    let var = (m_e2 / w_total - mean * mean).max(0.0);
    let u_mean = (0..n_u).map(|j| w_u[j] * u_at(j)).sum::<f64>() / w_total;
    let quantile = |q: f64| {
        let mut acc = 0.0;
        for (j, w) in w_u.iter().enumerate() {
            acc += w / w_total;
            if acc >= q {
                return u_at(j);
            }
        }
        U_MAX
    };
    Baseline {
        ei0: mean,
        var,
        underreport: Some((u_mean, quantile(0.025), quantile(0.975))),
    }
}

#[cfg(test)]
mod grid_tests {
    use super::*;

    /// The grid as it was computed before the EI₀ column was summed a block at a time: one cell
    /// after another, each summing its blocks in order.
    fn grid_cell_by_cell(
        blocks: &[Block],
        prior: f64,
        sd0: f64,
        u_prior: f64,
        u_sd: f64,
    ) -> (Vec<f64>, f64) {
        let grid = Grid { prior, sd0 };
        let (n_u, ei_at, u_at, cell) = (Grid::N_U, |i| grid.ei0(i), Grid::u, Grid::cell);
        let mut logp = vec![0.0_f64; UNDERREPORT_BLOCK_SDS.len() * EI0_STEPS * n_u];
        let mut best = f64::NEG_INFINITY;
        let mut inv_ln = vec![(0.0_f64, 0.0_f64); blocks.len()];
        for (k, &wobble) in UNDERREPORT_BLOCK_SDS.iter().enumerate() {
            for j in 0..n_u {
                let u = u_at(j);
                let keep = 1.0 - u;
                let lp_u = -0.5 * ((u - u_prior) / u_sd).powi(2);
                for (b, slot) in blocks.iter().zip(inv_ln.iter_mut()) {
                    let v = b.logged_var + keep * keep * b.change_var + (wobble * b.logged).powi(2);
                    *slot = (1.0 / v, v.ln());
                }
                for i in 0..EI0_STEPS {
                    let ei0 = ei_at(i);
                    let mut lp = lp_u - 0.5 * ((ei0 - prior) / sd0).powi(2);
                    for (b, (inv, ln)) in blocks.iter().zip(&inv_ln) {
                        let r = b.logged - keep * (ei0 + b.change);
                        lp -= 0.5 * (ln + r * r * inv);
                    }
                    logp[cell(k, i, j)] = lp;
                    best = best.max(lp);
                }
            }
        }
        (logp, best)
    }

    /// The reports print figures from this grid: summing the column a block at a time must give
    /// every cell bit for bit what one cell at a time gave, or the outputs change.
    #[test]
    fn the_grid_summed_by_column_is_bit_for_bit_the_grid_summed_by_cell() {
        for (n, seed) in [(1_usize, 1_u64), (4, 7), (26, 2026), (40, 99)] {
            let mut x = seed;
            let mut next = || {
                // xorshift64: fixed pseudo-random values, the same on every run.
                x ^= x << 13;
                x ^= x >> 7;
                x ^= x << 17;
                (x >> 11) as f64 / (1u64 << 53) as f64
            };
            let blocks: Vec<Block> = (0..n)
                .map(|_| Block {
                    logged: 1_400.0 + 1_200.0 * next(),
                    logged_var: 10_000.0 + 90_000.0 * next(),
                    change: -600.0 + 900.0 * next(),
                    change_var: 5_000.0 + 60_000.0 * next(),
                })
                .collect();
            let (prior, sd0) = (2_300.0 + 400.0 * next(), 180.0 + 120.0 * next());
            let (u_prior, u_sd) = (0.1 + 0.2 * next(), 0.1 + 0.2 * next());
            let (a, best_a) = log_posterior_grid(&blocks, prior, sd0, u_prior, u_sd);
            let (b, best_b) = grid_cell_by_cell(&blocks, prior, sd0, u_prior, u_sd);
            assert_eq!(best_a.to_bits(), best_b.to_bits(), "{n} blocks");
            assert_eq!(a.len(), b.len());
            for (i, (p, q)) in a.iter().zip(&b).enumerate() {
                assert_eq!(p.to_bits(), q.to_bits(), "{n} blocks, cell {i}: {p} vs {q}");
            }
        }
    }
}

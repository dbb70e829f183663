//! Steps in the weigh-ins: a jump between two weigh-in days, kept on the following days, that is
//! too large and too sudden for body weight — another scale, clothing, a unit or typing mistake
//! carried on for days, or a shift of body fluid — rather than tissue.
//!
//! A step read as tissue change makes nonsense of everything built on the trend: a −5 kg step
//! reads as a month of very fast loss, an implied intake near nothing and a clinician alert; a
//! +5 kg step as weeks of feasting. The trend module finds such steps here and fits the trend
//! with the weigh-ins before each step moved onto the level of those after it (an intervention
//! in the state-space model with its size estimated from the data; Box & Tiao 1975, J Am Stat
//! Assoc 70:70), and says so in a flag.
//!
//! # Method
//! At each boundary between two consecutive weigh-in days at most [`MAX_GAP_DAYS`] apart, the
//! daily means of the [`SIDE_DAYS`] days before and after (at least [`MIN_PER_SIDE`] weigh-in
//! days on each side) are fitted by least squares with one straight line and a shift δ from the
//! second day on, y = a + b·t + δ·[t ≥ t₂] (a Chow-type test of a break in level; Chow 1960,
//! Econometrica 28:591). SE(δ) is the scatter SD × √((D̃ᵀD̃)⁻¹) (D̃ the shift indicator with the
//! line partialled out, Frisch–Waugh), times the trend's inflation for day-to-day correlated
//! scatter. The jump must also show in robust levels and last: the median of the three
//! weigh-in days after the boundary minus the median of the three before must reach
//! [`MIN_STEP_KG`] too, and the weigh-ins a week or more after it must still sit at least half
//! of that away from the level before (a week-long fluid excursion returns). The scatter SD is the larger of the local fit's residual SD and the trend model's
//! σ_ε for the whole record: six weigh-ins fit three parameters almost exactly, and a
//! week-long excursion of correlated scatter fits the shift, so the local residuals alone
//! understate the noise (on the project's simulator, with no steps in the truth, they called
//! a step for one person in twenty). A boundary is a step when |δ| ≥ [`MIN_STEP_KG`] and |δ|/SE ≥ [`MIN_Z`]. Steps are
//! taken strongest first; a boundary within [`SIDE_DAYS`] days of a step already taken is not
//! tested again (its windows hold that step).

use chrono::NaiveDate;

/// Days each side of a boundary that the test reads (two weeks: enough weigh-ins to see a level
/// kept, short enough that a straight line describes tissue change; program choice).
pub const SIDE_DAYS: i64 = 14;
/// Longest gap between the two weigh-in days of a boundary, days: over a longer gap body weight
/// can change by that much (program choice).
pub const MAX_GAP_DAYS: i64 = 7;
/// Weigh-in days needed on each side (one stray reading is the outlier screen's business).
pub const MIN_PER_SIDE: usize = 3;
/// Smallest step, kg. The fast part of body weight moves by up to a few kilograms within days
/// when a diet starts or stops: the whole glycogen store with its bound water is about 2 kg in
/// adults (Kreitzman et al. 1992, Am J Clin Nutr 56:292S; from memory), and extracellular water
/// follows sodium intake by a similar amount. The project's simulator, which models both, gives
/// jumps of 3–4 kg within days when a person stops dieting, and those must stay weight. A step
/// of 5 kg is beyond both together (program choice of the margin); smaller artefacts (a
/// clothed weigh-in, a scale that reads 1–2 kg off) are left to the weigh-in sources' offsets
/// and the outlier screen.
pub const MIN_STEP_KG: f64 = 5.0;
/// Smallest |δ|/SE (program choice: a person's record has a hundred or more boundaries, so the
/// test is strict; with the size limit, honest records almost never reach it).
pub const MIN_Z: f64 = 5.0;
/// More steps than this are not steps but a mix of scales or people; the trend is then left as
/// it is and the flag says the weigh-ins jump back and forth.
pub const MAX_STEPS: usize = 3;

/// A step found in the weigh-ins.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Step {
    /// Last weigh-in day before the step.
    pub before: NaiveDate,
    /// First weigh-in day after it.
    pub after: NaiveDate,
    /// Size, kg (after minus before, beyond the local line).
    pub kg: f64,
    /// Its standard error, kg.
    pub se: f64,
    /// Level just before it (median of the last three weigh-in days), kg.
    pub level_before: f64,
}

/// Pounds per kilogram (1 / 0.45359237, international yard and pound agreement of 1959).
const LB_PER_KG: f64 = 1.0 / 0.453_592_37;
/// How close to 2.2046 (or its inverse) the ratio of the levels after and before a step must be
/// to be read as a change of unit (common practice: weight moves by far less than 6 % in days).
const UNIT_RATIO_TOLERANCE: f64 = 0.06;

impl Step {
    /// Whether the levels after and before differ by the pound–kilogram factor: readings in
    /// one unit written under the other. Which side is right the weigh-ins cannot say, so such
    /// a step is named, not moved.
    pub fn is_unit_change(&self) -> bool {
        let ratio = (self.level_before + self.kg) / self.level_before;
        [LB_PER_KG, 1.0 / LB_PER_KG]
            .iter()
            .any(|f| (ratio / f - 1.0).abs() <= UNIT_RATIO_TOLERANCE)
    }
}

/// The steps in daily mean weigh-ins `days` (date, kg), sorted by date, with `sigma` the trend
/// model's scatter SD (kg) and `inflation` its correlated-scatter factor on standard errors.
/// Returns them in date order.
pub fn find_steps(days: &[(NaiveDate, f64)], sigma: f64, inflation: f64) -> Vec<Step> {
    let mut candidates: Vec<Step> = days
        .windows(2)
        .enumerate()
        .filter(|(_, w)| (w[1].0 - w[0].0).num_days() <= MAX_GAP_DAYS)
        .filter_map(|(i, w)| test_boundary(days, i, w[0].0, w[1].0, sigma, inflation))
        .filter(|s| s.kg.abs() >= MIN_STEP_KG && s.kg.abs() >= MIN_Z * s.se)
        .collect();
    candidates.sort_by(|a, b| {
        let za = a.kg.abs() / a.se.max(f64::MIN_POSITIVE);
        let zb = b.kg.abs() / b.se.max(f64::MIN_POSITIVE);
        zb.total_cmp(&za)
    });
    let mut taken: Vec<Step> = Vec::new();
    for c in candidates {
        let near = taken
            .iter()
            .any(|t| (c.after - t.after).num_days().abs() <= SIDE_DAYS);
        if !near {
            taken.push(c);
        }
    }
    taken.sort_by_key(|s| s.after);
    taken
}

/// The shift test at the boundary between `days[i]` (`d1`) and `days[i + 1]` (`d2`).
fn test_boundary(
    days: &[(NaiveDate, f64)],
    i: usize,
    d1: NaiveDate,
    d2: NaiveDate,
    sigma: f64,
    inflation: f64,
) -> Option<Step> {
    let lo = d1 - chrono::Days::new(SIDE_DAYS as u64 - 1);
    let hi = d2 + chrono::Days::new(SIDE_DAYS as u64 - 1);
    let before: Vec<&(NaiveDate, f64)> = days[..=i].iter().filter(|d| d.0 >= lo).collect();
    let after: Vec<&(NaiveDate, f64)> = days[i + 1..].iter().filter(|d| d.0 <= hi).collect();
    if before.len() < MIN_PER_SIDE || after.len() < MIN_PER_SIDE {
        return None;
    }
    // (t, y, D): t in days from d2, D the shift indicator.
    let pts: Vec<(f64, f64, f64)> = before
        .iter()
        .map(|d| ((d.0 - d2).num_days() as f64, d.1, 0.0))
        .chain(
            after
                .iter()
                .map(|d| ((d.0 - d2).num_days() as f64, d.1, 1.0)),
        )
        .collect();
    let n = pts.len() as f64;
    let (mt, my, md) = pts.iter().fold((0.0, 0.0, 0.0), |a, p| {
        (a.0 + p.0 / n, a.1 + p.1 / n, a.2 + p.2 / n)
    });
    // Partial the line out of y and D (Frisch–Waugh): residuals of each on [1, t].
    let stt: f64 = pts.iter().map(|p| (p.0 - mt).powi(2)).sum();
    if stt <= 0.0 {
        return None;
    }
    let b_y = pts.iter().map(|p| (p.0 - mt) * (p.1 - my)).sum::<f64>() / stt;
    let b_d = pts.iter().map(|p| (p.0 - mt) * (p.2 - md)).sum::<f64>() / stt;
    let ry: Vec<f64> = pts.iter().map(|p| (p.1 - my) - b_y * (p.0 - mt)).collect();
    let rd: Vec<f64> = pts.iter().map(|p| (p.2 - md) - b_d * (p.0 - mt)).collect();
    let sdd: f64 = rd.iter().map(|x| x * x).sum();
    if sdd <= 1e-12 {
        return None;
    }
    // Robust levels next to the boundary, and what the weigh-ins a week on still show.
    let near_before = median(before.iter().rev().take(MIN_PER_SIDE).map(|d| d.1));
    let near_after = median(after.iter().take(MIN_PER_SIDE).map(|d| d.1));
    let late_after = median(
        after
            .iter()
            .filter(|d| (d.0 - d2).num_days() >= 7)
            .map(|d| d.1),
    );
    let near = near_after? - near_before?;
    let late = late_after? - near_before?;
    if near.abs() < MIN_STEP_KG || late * near <= 0.0 || late.abs() < 0.5 * MIN_STEP_KG {
        return None;
    }
    let delta = rd.iter().zip(&ry).map(|(d, y)| d * y).sum::<f64>() / sdd;
    let rss: f64 = ry
        .iter()
        .zip(&rd)
        .map(|(y, d)| (y - delta * d).powi(2))
        .sum();
    let dof = pts.len().saturating_sub(3).max(1) as f64;
    // Never below the whole record's scatter (see the module notes), nor below 0.1 kg (readings
    // are rounded to it; a perfectly straight record must not make a shift infinitely
    // significant).
    let s = (rss / dof).sqrt().max(sigma).max(0.1);
    let se = inflation.max(1.0) * s / sdd.sqrt();
    Some(Step {
        before: d1,
        after: d2,
        kg: delta,
        se,
        level_before: near_before?,
    })
}

/// The median of `xs`, `None` when there are none.
fn median(xs: impl Iterator<Item = f64>) -> Option<f64> {
    let mut v: Vec<f64> = xs.collect();
    if v.is_empty() {
        return None;
    }
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    Some(if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    })
}

/// Total of the steps after `day` (kg): what a weigh-in on `day` is moved by to sit on the
/// level of the latest weigh-ins.
pub fn shift_after(steps: &[Step], day: NaiveDate) -> f64 {
    steps.iter().filter(|s| s.before >= day).map(|s| s.kg).sum()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(i: i64) -> NaiveDate {
        NaiveDate::from_ymd_opt(2026, 3, 1).unwrap() + chrono::Days::new(i as u64)
    }

    /// A deterministic scatter in [−a, a] (no random numbers needed).
    fn wiggle(i: i64, a: f64) -> f64 {
        a * (((i * 7919) % 23) as f64 / 11.0 - 1.0)
    }

    #[test]
    fn a_six_kilogram_drop_between_two_days_is_found_with_its_size() {
        // Losing 0.07 kg a day with ±0.6 kg scatter; from day 40 the readings are 6 kg lower.
        let days: Vec<(NaiveDate, f64)> = (0..80)
            .map(|i| {
                let step = if i >= 40 { -6.0 } else { 0.0 };
                (d(i), 95.0 - 0.07 * i as f64 + wiggle(i, 0.6) + step)
            })
            .collect();
        let steps = find_steps(&days, 0.6, 1.0);
        assert_eq!(steps.len(), 1, "{steps:?}");
        assert_eq!((steps[0].before, steps[0].after), (d(39), d(40)));
        assert!((steps[0].kg + 6.0).abs() < 0.5, "{:?}", steps[0]);
        // The earlier weigh-ins move down by the step; the later ones stay.
        assert!((shift_after(&steps, d(10)) - steps[0].kg).abs() < 1e-12);
        assert_eq!(shift_after(&steps, d(40)), 0.0);
        assert!(!steps[0].is_unit_change());
    }

    #[test]
    fn readings_in_pounds_under_kilograms_are_a_unit_change() {
        let days: Vec<(NaiveDate, f64)> = (0..60)
            .map(|i| {
                let kg = 80.0 - 0.05 * i as f64 + wiggle(i, 0.4);
                (d(i), if i >= 30 { kg * LB_PER_KG } else { kg })
            })
            .collect();
        let steps = find_steps(&days, 0.4, 1.0);
        assert_eq!(steps.len(), 1, "{steps:?}");
        assert!(steps[0].is_unit_change(), "{:?}", steps[0]);
    }

    #[test]
    fn a_fast_but_smooth_loss_and_ordinary_scatter_are_no_step() {
        // 2 kg of glycogen and water over the first week, then 0.1 kg a day, ±0.9 kg scatter.
        let days: Vec<(NaiveDate, f64)> = (0..120)
            .map(|i| {
                let water = 2.0 * (1.0 - (-(i as f64) / 3.0).exp());
                (d(i), 110.0 - water - 0.1 * i as f64 + wiggle(i, 0.9))
            })
            .collect();
        assert!(find_steps(&days, 0.6, 1.0).is_empty());
        // Weekly weigh-ins never have three days a side within two weeks: no verdict.
        let weekly: Vec<(NaiveDate, f64)> = (0..20)
            .map(|w| (d(7 * w), 100.0 - if w >= 10 { 6.0 } else { 0.0 }))
            .collect();
        assert!(find_steps(&weekly, 0.6, 1.0).is_empty());
    }

    #[test]
    fn a_shift_below_the_size_limit_a_returning_excursion_and_a_long_gap_are_no_step() {
        let shifted = |size: f64, gap: i64| -> Vec<(NaiveDate, f64)> {
            (0..30)
                .map(|i| (d(i), 90.0 + wiggle(i, 0.2)))
                .chain((0..30).map(|i| (d(30 + gap + i), 90.0 + size + wiggle(i, 0.2))))
                .collect()
        };
        assert_eq!(find_steps(&shifted(6.0, 0), 0.3, 1.0).len(), 1);
        // Four kilograms within days: a stop of a diet refills glycogen and water that fast.
        assert!(find_steps(&shifted(4.0, 0), 0.3, 1.0).is_empty());
        // Ten days without a weigh-in: six kilograms may be real change.
        assert!(find_steps(&shifted(6.0, 10), 0.3, 1.0).is_empty());
        // Six kilograms up for five days, then back: an excursion, not a step.
        let excursion: Vec<(NaiveDate, f64)> = (0..60)
            .map(|i| (d(i), 90.0 + if (30..35).contains(&i) { 6.0 } else { 0.0 }))
            .collect();
        assert!(find_steps(&excursion, 0.3, 1.0).is_empty());
    }
}

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
//! [`MIN_STEP_KG`] too, the weigh-ins a week or more after it must still sit at least half of
//! that away from the level before (a week-long fluid excursion returns), and the weigh-ins a
//! week or more before it at least half of that away from the level after, unless the record
//! starts within that week (the end of a short excursion is no step either: moved, it would
//! shift the whole record before it). The scatter
//! SD is the larger of the local fit's residual SD and the trend model's σ_ε for the whole
//! record: six weigh-ins fit three parameters almost exactly, and a week-long excursion of
//! correlated scatter fits the shift, so the local residuals alone understate the noise (on the
//! project's simulator, with no steps in the truth, they called a step for one person in
//! twenty). A boundary is a step when |δ| ≥ [`MIN_STEP_KG`] and |δ|/SE ≥ [`MIN_Z`]. Steps are
//! taken strongest first, one at a time, and no window reaches across a step already taken;
//! two steps the same way under two weeks apart, which pass neither alone, are tested as a
//! pair (see [`find_steps`]); each size is then estimated again between its neighbours.

use crate::view::WeighInStepRow;
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

/// Pounds per kilogram (the API's exact kilograms per pound, inverted).
const LB_PER_KG: f64 = 1.0 / cohortpress_metric_api::units::KG_PER_LB;
/// How close to 2.2046 (or its inverse) the ratio of the levels after and before a step must be
/// to be read as a change of unit (common practice: weight moves by far less than 6 % in days).
const UNIT_RATIO_TOLERANCE: f64 = 0.06;

impl Step {
    /// The step as a row of the `weigh_in_steps` table (what the trend moves the weigh-ins by
    /// is [`crate::view::step_shift_after`] of such rows).
    pub fn row(&self) -> WeighInStepRow {
        WeighInStepRow {
            before: self.before,
            after: self.after,
            step_kg: Some(self.kg).filter(|x| x.is_finite()),
            se_kg: Some(self.se).filter(|x| x.is_finite()),
        }
    }

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
///
/// Steps are taken strongest first, one at a time, and no test window reaches across a step
/// already taken: the boundaries next to a step (the same jump spread over two days) then have
/// too few weigh-ins on one side to be tested, and a second step a week or two away (a scale
/// used for ten days, then put back) is tested on the level between the two. When no single
/// step passes, two the same way under two weeks apart are looked for as a pair
/// (`staircase`), and a step next to a taken one the same way needs no week-kept level on
/// that side (`test_between`). Finally each step's size is estimated again between its
/// neighbours. With windows that crossed another
/// step, a scale put back after 8 to 14 days gave one step of the wrong size, or only one of
/// the two: every weigh-in before the first was moved by 6-8 kg, and the change since the
/// start showed a loss or gain that never happened.
pub fn find_steps(days: &[(NaiveDate, f64)], sigma: f64, inflation: f64) -> Vec<Step> {
    let z = |s: &Step| s.kg.abs() / s.se.max(f64::MIN_POSITIVE);
    let mut taken: Vec<Step> = Vec::new();
    loop {
        let strongest = boundaries(days, &taken)
            .filter_map(|i| test_between(days, i, &taken, sigma, inflation))
            .max_by(|a, b| z(a).total_cmp(&z(b)));
        match strongest
            .map(|s| vec![s])
            .or_else(|| staircase(days, &taken, sigma, inflation))
        {
            Some(found) => taken.extend(found),
            None => break,
        }
    }
    taken.sort_by_key(|s| s.after);
    // Each size again, on the weigh-ins between its neighbours only (a step taken before its
    // neighbour was measured across it).
    let sized: Vec<Step> = taken
        .iter()
        .map(|t| {
            let others: Vec<Step> = taken
                .iter()
                .filter(|o| o.after != t.after)
                .copied()
                .collect();
            let i = days.partition_point(|d| d.0 < t.after) - 1;
            test_between(days, i, &others, sigma, inflation).unwrap_or(*t)
        })
        .collect();
    sized
}

/// Whether a tested shift is a step: at least [`MIN_STEP_KG`] and [`MIN_Z`] standard errors.
fn passes(s: &Step) -> bool {
    s.kg.abs() >= MIN_STEP_KG && s.kg.abs() >= MIN_Z * s.se
}

/// The boundaries (index of the earlier weigh-in day) that may be tested: the two days at
/// most [`MAX_GAP_DAYS`] apart, not a step already taken, and with a jump of at least
/// [`MIN_STEP_KG`] between the medians of the [`MIN_PER_SIDE`] weigh-in days next to it on
/// each side. [`test_boundary`] requires that jump of the same days whatever window it reads
/// (a window cut closer leaves fewer than [`MIN_PER_SIDE`] days a side and fails), so this
/// only skips boundaries that cannot pass; it keeps the pair search of [`staircase`] off the
/// trend's hot path (it had doubled the trend module's time on records without a step).
fn boundaries<'a>(
    days: &'a [(NaiveDate, f64)],
    taken: &'a [Step],
) -> impl Iterator<Item = usize> + 'a {
    let level = |s: &[(NaiveDate, f64)]| median(s.iter().map(|d| d.1));
    days.windows(2)
        .enumerate()
        .filter(|(_, w)| (w[1].0 - w[0].0).num_days() <= MAX_GAP_DAYS)
        .filter(move |(_, w)| taken.iter().all(|t| t.after != w[1].0))
        .map(|(i, _)| i)
        .filter(move |&i| {
            i + 1 >= MIN_PER_SIDE
                && i + MIN_PER_SIDE < days.len()
                && level(&days[i + 1 - MIN_PER_SIDE..=i])
                    .zip(level(&days[i + 1..=i + MIN_PER_SIDE]))
                    .is_some_and(|(b, a)| (a - b).abs() >= MIN_STEP_KG)
        })
}

/// The step test at boundary `i` between the steps `taken`. Where a step taken within
/// [`SIDE_DAYS`] on one side goes the same way as this one, the check that the level is kept
/// a week on that side is waived: the weigh-ins beyond that step sit further still the same
/// way, so the level was kept (a staircase, e.g. a scale that reads 6 kg high replaced within
/// days by one 12 kg high). A taken step the other way keeps the check: that is a short
/// excursion returning.
fn test_between(
    days: &[(NaiveDate, f64)],
    i: usize,
    taken: &[Step],
    sigma: f64,
    inflation: f64,
) -> Option<Step> {
    let after = days[i + 1].0;
    let prev = taken
        .iter()
        .filter(|t| t.after < after)
        .max_by_key(|t| t.after);
    let next = taken
        .iter()
        .filter(|t| t.after > after)
        .min_by_key(|t| t.after);
    let (floor, ceiling) = (prev.map(|t| t.after), next.map(|t| t.after));
    let close = |t: &&Step| (t.after - after).num_days().abs() <= SIDE_DAYS;
    let (prev, next) = (prev.filter(close), next.filter(close));
    let mut tries = vec![Kept::BOTH];
    if next.is_some() {
        tries.push(Kept {
            late: false,
            ..Kept::BOTH
        });
    }
    if prev.is_some() {
        tries.push(Kept {
            early: false,
            ..Kept::BOTH
        });
    }
    if prev.is_some() && next.is_some() {
        tries.push(Kept {
            late: false,
            early: false,
            ..Kept::BOTH
        });
    }
    tries.into_iter().find_map(|k| {
        let s = test_boundary(days, i, floor, ceiling, sigma, inflation, k).filter(passes)?;
        let same_way = |t: Option<&Step>| t.is_some_and(|t| t.kg * s.kg > 0.0);
        ((k.late || same_way(next)) && (k.early || same_way(prev))).then_some(s)
    })
}

/// Two steps the same way less than [`SIDE_DAYS`] apart that neither passes alone: each one's
/// window holds the other, so one shift plus a line does not fit the staircase (the line takes
/// part of it and the residuals grow), and neither is ever taken to split the other's window.
/// Each is tested on its own side of the other: the first with the weigh-ins between the two
/// as its "after", the second with them as its "before". The level before the first must have
/// been kept a week, and the level after the second a week on; the level between needs
/// [`MIN_PER_SIDE`] weigh-in days but not a week (the second step carries it further the same
/// way). Both must pass the size and z limits, so together they move the record by twice the
/// smallest step within two weeks, which no change of body weight does. The pair with the
/// larger weaker z is returned.
fn staircase(
    days: &[(NaiveDate, f64)],
    taken: &[Step],
    sigma: f64,
    inflation: f64,
) -> Option<Vec<Step>> {
    let cand: Vec<usize> = boundaries(days, taken).collect();
    let z = |s: &Step| s.kg.abs() / s.se.max(f64::MIN_POSITIVE);
    let mut best: Option<(f64, Step, Step)> = None;
    for (k, &i) in cand.iter().enumerate() {
        let a1 = days[i + 1].0;
        let (floor, ceiling) = between(taken, a1);
        for &j in &cand[k + 1..] {
            let a2 = days[j + 1].0;
            if (a2 - a1).num_days() > SIDE_DAYS || ceiling.is_some_and(|c| a2 >= c) {
                break;
            }
            let first = Kept {
                late: false,
                ..Kept::BOTH
            };
            let second = Kept {
                early: false,
                ..Kept::BOTH
            };
            let Some(s1) =
                test_boundary(days, i, floor, Some(a2), sigma, inflation, first).filter(passes)
            else {
                continue;
            };
            let Some(s2) =
                test_boundary(days, j, Some(a1), ceiling, sigma, inflation, second).filter(passes)
            else {
                continue;
            };
            let score = z(&s1).min(z(&s2));
            if s1.kg * s2.kg > 0.0 && best.as_ref().is_none_or(|b| score > b.0) {
                best = Some((score, s1, s2));
            }
        }
    }
    best.map(|(_, a, b)| vec![a, b])
}

/// Which "level kept" checks a boundary test makes (see [`test_boundary`]).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Kept {
    /// All the weigh-ins after the boundary show whether the new level is kept (the record's
    /// last week, [`recent_step`]), not only those a week or more after it.
    open_end: bool,
    /// The weigh-ins after the boundary must keep the new level.
    late: bool,
    /// The weigh-ins a week or more before must have kept the level left.
    early: bool,
}

impl Kept {
    const BOTH: Kept = Kept {
        open_end: false,
        late: true,
        early: true,
    };
    const OPEN_END: Kept = Kept {
        open_end: true,
        late: true,
        early: true,
    };
}

/// A jump in the record's last week that every weigh-in since has kept (at least
/// [`MIN_PER_SIDE`] days of them), too recent for [`find_steps`], which waits a week to see the
/// new level kept; the steps already found are `taken`. The same test otherwise, with the
/// weigh-ins since the jump standing for the week after. Such a jump is not moved (it may
/// still go back), but it is named: the trend's outlier screen tends to leave the last days of
/// a sudden new level out as stray readings, and a 6 kg rise of fluid in the month's last days
/// went unsaid until the next month's report.
pub fn recent_step(
    days: &[(NaiveDate, f64)],
    sigma: f64,
    inflation: f64,
    taken: &[Step],
) -> Option<Step> {
    let last = days.last()?.0;
    days.windows(2)
        .enumerate()
        .filter(|(_, w)| (w[1].0 - w[0].0).num_days() <= MAX_GAP_DAYS)
        .filter(|(_, w)| (last - w[1].0).num_days() < 7)
        .filter_map(|(i, w)| {
            let (floor, _) = between(taken, w[1].0);
            test_boundary(days, i, floor, None, sigma, inflation, Kept::OPEN_END)
        })
        .filter(|s| s.kg.abs() >= MIN_STEP_KG && s.kg.abs() >= MIN_Z * s.se)
        .max_by(|a, b| (a.kg.abs() / a.se).total_cmp(&(b.kg.abs() / b.se)))
}

/// The weigh-in days a boundary whose later day is `after` may read, given the steps taken:
/// from the first day after the last step before it (inclusive), up to the first day after the
/// next step (exclusive).
fn between(taken: &[Step], after: NaiveDate) -> (Option<NaiveDate>, Option<NaiveDate>) {
    let floor = taken.iter().map(|t| t.after).filter(|&a| a < after).max();
    let ceiling = taken.iter().map(|t| t.after).filter(|&a| a > after).min();
    (floor, ceiling)
}

/// The shift test at the boundary between `days[i]` and `days[i + 1]`, reading no weigh-in
/// before `floor` or on or after `ceiling`, making the level-kept `checks`. With `open_end`, all the weigh-ins after the
/// boundary show whether the new level is kept (see [`recent_step`]), else those a week or
/// more after it.
fn test_boundary(
    days: &[(NaiveDate, f64)],
    i: usize,
    floor: Option<NaiveDate>,
    ceiling: Option<NaiveDate>,
    sigma: f64,
    inflation: f64,
    checks: Kept,
) -> Option<Step> {
    let (d1, d2) = (days[i].0, days[i + 1].0);
    let lo = d1 - chrono::Days::new(SIDE_DAYS as u64 - 1);
    let hi = d2 + chrono::Days::new(SIDE_DAYS as u64 - 1);
    // `days` is in date order: each side's window by binary search, so a record of n days costs
    // n log n, not n² (every boundary scanned the whole record).
    let start = days[..=i].partition_point(|d| d.0 < lo);
    let end = i + 1 + days[i + 1..].partition_point(|d| d.0 <= hi);
    let before: Vec<&(NaiveDate, f64)> = days[start..=i]
        .iter()
        .filter(|d| floor.is_none_or(|f| d.0 >= f))
        .collect();
    let after: Vec<&(NaiveDate, f64)> = days[i + 1..end]
        .iter()
        .filter(|d| ceiling.is_none_or(|c| d.0 < c))
        .collect();
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
    // Robust levels next to the boundary, what the weigh-ins a week on still show ...
    let near_before = median(before.iter().rev().take(MIN_PER_SIDE).map(|d| d.1));
    let near_after = median(after.iter().take(MIN_PER_SIDE).map(|d| d.1));
    let late_after = median(
        after
            .iter()
            .filter(|d| checks.open_end || (d.0 - d2).num_days() >= 7)
            .map(|d| d.1),
    );
    // ... and what the weigh-ins a week or more before it showed: the level left must have been
    // kept too, or the step is the return of a short excursion (a scale used for a few days),
    // and moving every earlier weigh-in by it would shift the whole record.
    let early_before = median(
        before
            .iter()
            .filter(|d| (d1 - d.0).num_days() >= 7)
            .map(|d| d.1),
    );
    let (near_before, near_after) = (near_before?, near_after?);
    let near = near_after - near_before;
    let kept = |x: f64| x * near > 0.0 && x.abs() >= 0.5 * MIN_STEP_KG;
    let late_kept = late_after.is_some_and(|l| kept(l - near_before));
    // Within the record's first week there is nothing before the level left (a first week on
    // another scale, or in pounds): only then may the week before be missing.
    let record_start = floor.is_none() && before.first().map(|d| d.0) == days.first().map(|d| d.0);
    let early_kept = match early_before {
        Some(e) => kept(near_after - e),
        None => record_start,
    };
    if near.abs() < MIN_STEP_KG || (checks.late && !late_kept) || (checks.early && !early_kept) {
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
        level_before: near_before,
    })
}

/// The median of `xs` ([`crate::llt::median_in_place`]), `None` when there are none.
fn median(xs: impl Iterator<Item = f64>) -> Option<f64> {
    let mut v: Vec<f64> = xs.collect();
    (!v.is_empty()).then(|| crate::llt::median_in_place(&mut v))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// What the trend moves a weigh-in on `day` by for `steps`.
    fn shift_after(steps: &[Step], day: NaiveDate) -> f64 {
        let rows: Vec<WeighInStepRow> = steps.iter().map(Step::row).collect();
        crate::view::step_shift_after(&rows, day)
    }

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

    /// A drop in the record's last days: too recent for `find_steps`, named by `recent_step`
    /// once three weigh-in days keep it, with its size.
    #[test]
    fn a_drop_in_the_last_days_is_a_recent_step_once_three_days_keep_it() {
        let series = |from: i64| -> Vec<(NaiveDate, f64)> {
            (0..60)
                .map(|i| {
                    (
                        d(i),
                        90.0 + wiggle(i, 0.3) - if i >= from { 6.0 } else { 0.0 },
                    )
                })
                .collect()
        };
        let days = series(55);
        assert_eq!(find_steps(&days, 0.3, 1.0), vec![]);
        let r = recent_step(&days, 0.3, 1.0, &[]).expect("recent step");
        assert_eq!((r.before, r.after), (d(54), d(55)));
        assert!((r.kg + 6.0).abs() < 0.4, "{r:?}");
        assert_eq!(recent_step(&series(58), 0.3, 1.0, &[]), None);
        assert_eq!(recent_step(&series(100), 0.3, 1.0, &[]), None);
    }

    /// The first five days in pounds under kg (the unit check of the weigh-in files has no
    /// earlier weigh-in to compare them with): named as a change of unit. Requiring the level
    /// before a step to have been kept for a week had lost it (there is no week before).
    #[test]
    fn pounds_in_the_records_first_days_are_a_unit_change() {
        let days: Vec<(NaiveDate, f64)> = (0..60)
            .map(|i| {
                let kg = 80.0 - 0.05 * i as f64 + wiggle(i, 0.4);
                (d(i), if i < 5 { kg * LB_PER_KG } else { kg })
            })
            .collect();
        let steps = find_steps(&days, 0.4, 1.0);
        assert_eq!(steps.len(), 1, "{steps:?}");
        assert_eq!((steps[0].before, steps[0].after), (d(4), d(5)));
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

    /// 6 kg up on day 40 (another scale), back on day 40 + `days`.
    fn put_back_after(days: i64) -> Vec<(NaiveDate, f64)> {
        let w = [0.3, -0.2, 0.1, -0.4, 0.2, 0.0, -0.1];
        (0..100)
            .map(|i| {
                let other = (40..40 + days).contains(&i);
                (
                    d(i),
                    90.0 + w[(i % 7) as usize] + if other { 6.0 } else { 0.0 },
                )
            })
            .collect()
    }

    /// A scale used for 8 to 14 days and then put back. With windows reaching across the other
    /// jump, 8 days gave one step of -7.8 kg on the day it was put back (every weigh-in before,
    /// right ones included, moved 7.8 kg down: a gain of 7.8 kg since the start), and 14 days
    /// gave only the +6 kg step (every weigh-in before moved up: a loss of 6 kg since the start).
    #[test]
    fn a_scale_put_back_after_days_moves_only_the_readings_in_between() {
        // 8 days: the level before the return was not kept for a week; no step.
        assert_eq!(find_steps(&put_back_after(8), 0.3, 1.0), vec![]);
        for days in [12, 14, 20] {
            let steps = find_steps(&put_back_after(days), 0.3, 1.0);
            let found: Vec<(NaiveDate, f64)> = steps.iter().map(|s| (s.after, s.kg)).collect();
            assert_eq!(steps.len(), 2, "{days}: {found:?}");
            assert_eq!((steps[0].after, steps[1].after), (d(40), d(40 + days)));
            assert!((steps[0].kg - 6.0).abs() < 0.3, "{days}: {found:?}");
            assert!((steps[1].kg + 6.0).abs() < 0.3, "{days}: {found:?}");
            // The right readings before the first step stay where they are; those in between
            // move down by about 6 kg.
            assert!(shift_after(&steps, d(10)).abs() < 0.3, "{days}: {found:?}");
            assert!((shift_after(&steps, d(45)) + 6.0).abs() < 0.3);
        }
    }

    /// Two steps the same way 5 to 30 days apart (a scale reading high, then another reading
    /// higher still), on a slow loss with a weekly rhythm. Under 14 days apart neither was found
    /// alone (each one's window held the other), so nothing was moved: a record with 12 kg of
    /// artefact showed a gain of 4.3 kg since the start where the loss was 7.8 kg.
    #[test]
    fn two_steps_the_same_way_days_apart_are_both_found_with_their_sizes() {
        let w = [0.3, -0.2, 0.1, -0.4, 0.2, 0.0, -0.1];
        for (first, second) in [(6.0, 6.0), (-6.0, -6.0), (6.0, 8.0), (-5.5, -7.0)] {
            for gap in [5_i64, 7, 8, 10, 12, 14, 20, 30] {
                let days: Vec<(NaiveDate, f64)> = (0..120)
                    .map(|i| {
                        let s = if i >= 40 { first } else { 0.0 }
                            + if i >= 40 + gap { second } else { 0.0 };
                        (d(i), 90.0 - 0.05 * i as f64 + w[(i % 7) as usize] + s)
                    })
                    .collect();
                let steps = find_steps(&days, 0.3, 1.0);
                let found: Vec<(NaiveDate, f64)> = steps.iter().map(|s| (s.after, s.kg)).collect();
                let case = format!("{first}/{second} gap {gap}: {found:?}");
                assert_eq!(steps.len(), 2, "{case}");
                assert_eq!(
                    (steps[0].after, steps[1].after),
                    (d(40), d(40 + gap)),
                    "{case}"
                );
                assert!((steps[0].kg - first).abs() < 0.5, "{case}");
                assert!((steps[1].kg - second).abs() < 0.5, "{case}");
                // The readings before the first step move onto the last level by both, those between
                // by the second.
                assert!(
                    (shift_after(&steps, d(10)) - first - second).abs() < 0.6,
                    "{case}"
                );
                assert!((shift_after(&steps, d(41)) - second).abs() < 0.5, "{case}");
                assert_eq!(shift_after(&steps, d(40 + gap)), 0.0, "{case}");
            }
        }
        // Opposite ways within a week is an excursion (see above), not a staircase; two jumps the
        // same way that add up to less than two steps' worth are left to the trend.
        assert_eq!(find_steps(&put_back_after(6), 0.3, 1.0), vec![]);
        let small: Vec<(NaiveDate, f64)> = (0..120)
            .map(|i| {
                let s = if i >= 40 { 3.5 } else { 0.0 } + if i >= 46 { 3.5 } else { 0.0 };
                (d(i), 90.0 + w[(i % 7) as usize] + s)
            })
            .collect();
        assert_eq!(find_steps(&small, 0.3, 1.0), vec![]);
    }
}

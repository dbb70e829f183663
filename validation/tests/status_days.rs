//! The status rows score each of days 60, 120 and the last day once.

use cohortpress_validation::run_person;
use cohortpress_validation::truth::{Weighing, simulate};

/// With `--days 120` the last day is day 120 itself: it was scored twice (as day 120 and as
/// the last day), so a person weighing in throughout counted three statuses, one of them twice.
#[test]
fn a_last_day_that_is_day_120_is_scored_once() {
    let seed = 20261202;
    let index = (0..300)
        .find(|&i| {
            let p = simulate(seed, i, 120);
            p.weighing == Weighing::Daily
                && p.withdrew.is_none()
                && [59, 119]
                    .iter()
                    .all(|&c| p.obs.iter().any(|o| o.day <= c && o.day + 28 > c))
        })
        .expect("a daily weigher recorded to the end");
    assert_eq!(run_person(seed, index, 120).status.len(), 2);
    // 180 days: days 60, 120 and 180.
    assert_eq!(run_person(seed, index, 180).status.len(), 3);
}

//! The tool's activity table: short codes people write in `activity.csv`, each with its MET value
//! and the Compendium code it comes from.
//!
//! Source of every MET value: Ainsworth BE, Haskell WL, Herrmann SD, et al. "2011 Compendium of
//! Physical Activities: a second update of codes and MET values." Med Sci Sports Exerc
//! 2011;43(8):1575–1581. The values were checked against the project's REFERENCE.md §2.2 (tag [C],
//! taken from a machine-readable copy of the official 2011 tables). The codes here are our own;
//! the Compendium code and edition are kept with each so a report can say where a MET came from.

/// One row of the activity table.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ActivityDef {
    /// Our code, as written in `activity.csv` (snake_case).
    pub code: &'static str,
    /// Plain description.
    pub description: &'static str,
    /// MET value (multiples of resting energy expenditure).
    pub met: f64,
    /// Compendium activity code (five digits, leading zero kept).
    pub compendium_code: &'static str,
    /// Compendium edition the MET value is taken from.
    pub edition: &'static str,
}

impl ActivityDef {
    /// Where the MET value comes from, e.g. `Compendium 2011 code 17190`.
    pub fn met_source(&self) -> String {
        format!("Compendium {} code {}", self.edition, self.compendium_code)
    }
}

const fn a(
    code: &'static str,
    description: &'static str,
    met: f64,
    compendium_code: &'static str,
) -> ActivityDef {
    ActivityDef {
        code,
        description,
        met,
        compendium_code,
        edition: "2011",
    }
}

/// Every activity, sorted by code. All values: 2011 Compendium (Ainsworth et al. 2011,
/// Med Sci Sports Exerc 43:1575), as listed in REFERENCE.md §2.2 [C].
static TABLE: &[ActivityDef] = &[
    a(
        "aerobics_high_impact",
        "aerobic exercise class, high impact",
        7.3,
        "03021",
    ),
    a(
        "aerobics_low_impact",
        "aerobic exercise class, low impact",
        5.0,
        "03020",
    ),
    a(
        "calisthenics_moderate",
        "calisthenics, moderate effort",
        3.8,
        "02022",
    ),
    a(
        "calisthenics_vigorous",
        "calisthenics, vigorous (push-ups, jumping jacks)",
        8.0,
        "02020",
    ),
    a(
        "cycling_10_12mph",
        "cycling, 10 to 11.9 mph, leisure, light effort",
        6.8,
        "01020",
    ),
    a(
        "cycling_12_14mph",
        "cycling, 12 to 13.9 mph, moderate effort",
        8.0,
        "01030",
    ),
    a(
        "cycling_14_16mph",
        "cycling, 14 to 15.9 mph, vigorous effort",
        10.0,
        "01040",
    ),
    a("cycling_general", "cycling, general", 7.5, "01015"),
    a(
        "cycling_leisure",
        "cycling, under 10 mph, leisure or commuting",
        4.0,
        "01010",
    ),
    a(
        "cycling_stationary",
        "stationary bike, general",
        7.0,
        "02010",
    ),
    a(
        "dancing",
        "dancing, general (folk, line, social)",
        7.8,
        "03031",
    ),
    a(
        "elliptical_moderate",
        "elliptical trainer, moderate effort",
        5.0,
        "02048",
    ),
    a(
        "gardening",
        "gardening, general, moderate effort",
        3.8,
        "08245",
    ),
    a("golf", "golf, general", 4.8, "15255"),
    a(
        "housework_light",
        "house cleaning, light (tidying, laundry)",
        2.5,
        "05040",
    ),
    a(
        "housework_moderate",
        "house cleaning, general, moderate effort",
        3.3,
        "05030",
    ),
    a("jogging", "jogging, general", 7.0, "12020"),
    a("mowing_lawn", "mowing the lawn, general", 5.5, "08095"),
    a("pilates", "pilates, general", 3.0, "02105"),
    a(
        "raking",
        "raking lawn or leaves, moderate effort",
        3.8,
        "08160",
    ),
    a("running_4mph", "running, 4 mph (15 min/mile)", 6.0, "12029"),
    a("running_5mph", "running, 5 mph (12 min/mile)", 8.3, "12030"),
    a("running_6mph", "running, 6 mph (10 min/mile)", 9.8, "12050"),
    a(
        "running_7mph",
        "running, 7 mph (8.5 min/mile)",
        11.0,
        "12070",
    ),
    a("stair_climbing", "climbing stairs, slow pace", 4.0, "17133"),
    a(
        "stair_climbing_fast",
        "climbing stairs, fast pace",
        8.8,
        "17134",
    ),
    a(
        "strength_training",
        "resistance training, several exercises, 8 to 15 repetitions",
        3.5,
        "02054",
    ),
    a(
        "strength_training_vigorous",
        "resistance training, power lifting, vigorous",
        6.0,
        "02050",
    ),
    a(
        "swimming_breaststroke",
        "swimming, breaststroke, recreational",
        5.3,
        "18265",
    ),
    a(
        "swimming_laps_moderate",
        "swimming laps, freestyle, light or moderate effort",
        5.8,
        "18240",
    ),
    a(
        "swimming_laps_vigorous",
        "swimming laps, freestyle, fast, vigorous effort",
        9.8,
        "18230",
    ),
    a(
        "swimming_leisure",
        "swimming, leisurely, not laps",
        6.0,
        "18310",
    ),
    a("tai_chi", "tai chi or qi gong, general", 3.0, "15670"),
    a("tennis", "tennis, general", 7.3, "15675"),
    a(
        "vacuuming",
        "vacuuming, general, moderate effort",
        3.3,
        "05043",
    ),
    a(
        "walking_2_5mph",
        "walking, 2.5 mph, level, firm surface",
        3.0,
        "17170",
    ),
    a(
        "walking_2mph",
        "walking, 2.0 mph, level, slow pace",
        2.8,
        "17152",
    ),
    a(
        "walking_3mph",
        "walking, 2.8 to 3.2 mph, level, moderate pace",
        3.5,
        "17190",
    ),
    a(
        "walking_4_5mph",
        "walking, 4.5 mph, level, very, very brisk",
        7.0,
        "17230",
    ),
    a(
        "walking_brisk_3_5mph",
        "walking, 3.5 mph, level, brisk, for exercise",
        4.3,
        "17200",
    ),
    a("walking_dog", "walking the dog", 3.0, "17165"),
    a("walking_for_pleasure", "walking for pleasure", 3.5, "17160"),
    a(
        "walking_slow",
        "walking, under 2.0 mph, strolling, very slow",
        2.0,
        "17151",
    ),
    a(
        "walking_very_brisk_4mph",
        "walking, 4.0 mph, level, very brisk",
        5.0,
        "17220",
    ),
    a("water_aerobics", "water aerobics", 5.3, "02120"),
    a("yoga_hatha", "yoga, hatha", 2.5, "02150"),
    a("yoga_power", "yoga, power", 4.0, "02160"),
];

/// The activity with code `code` (exact, case-insensitive), if the table has it.
pub fn lookup(code: &str) -> Option<&'static ActivityDef> {
    let code = code.trim();
    TABLE.iter().find(|d| d.code.eq_ignore_ascii_case(code))
}

/// Every activity in the table, sorted by code.
pub fn all() -> &'static [ActivityDef] {
    TABLE
}

/// A handful of common codes, for hints in messages.
pub fn common_codes() -> &'static [&'static str] {
    &[
        "walking_3mph",
        "walking_brisk_3_5mph",
        "cycling_leisure",
        "swimming_laps_moderate",
        "jogging",
        "strength_training",
        "yoga_hatha",
        "gardening",
    ]
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_is_sorted_unique_and_plausible() {
        for w in TABLE.windows(2) {
            assert!(w[0].code < w[1].code, "{} !< {}", w[0].code, w[1].code);
        }
        for d in TABLE {
            assert_eq!(d.compendium_code.len(), 5, "{}", d.code);
            assert!(d.compendium_code.chars().all(|c| c.is_ascii_digit()));
            // The loader accepts METs between 1 and 23, so the table must lie inside that range.
            assert!((1.0..=23.0).contains(&d.met), "{}", d.code);
        }
        for c in common_codes() {
            assert!(lookup(c).is_some(), "{c}");
        }
    }

    #[test]
    fn compendium_values_match_reference() {
        // Ainsworth et al. 2011, Med Sci Sports Exerc 43:1575 (REFERENCE.md §2.2, [C]).
        let w = lookup("walking_3mph").unwrap();
        assert_eq!((w.met, w.compendium_code), (3.5, "17190"));
        assert_eq!(w.met_source(), "Compendium 2011 code 17190");
        assert_eq!(lookup("walking_brisk_3_5mph").unwrap().met, 4.3);
        assert_eq!(lookup("cycling_10_12mph").unwrap().met, 6.8);
        assert_eq!(lookup("swimming_laps_moderate").unwrap().met, 5.8);
        assert_eq!(lookup("yoga_hatha").unwrap().met, 2.5);
        assert_eq!(lookup("cycling_leisure").unwrap().compendium_code, "01010");
    }

    #[test]
    fn lookup_ignores_case_and_unknown_codes_are_none() {
        assert!(lookup("Walking_3MPH").is_some());
        assert!(lookup(" jogging ").is_some());
        assert!(lookup("zumba-ish").is_none());
        assert!(lookup("").is_none());
    }
}

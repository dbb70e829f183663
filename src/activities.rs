//! The tool's activity table: short codes people write in `activity.csv`, each with its MET value
//! and the Compendium code it comes from.
//!
//! Source of every MET value: Ainsworth BE, Haskell WL, Herrmann SD, et al. "2011 Compendium of
//! Physical Activities: a second update of codes and MET values." Med Sci Sports Exerc
//! 2011;43(8):1575–1581. Every value and code was checked against a machine-readable copy of the
//! 2011 tables (`compendiumofphysicalactivities.csv` of github.com/andyreagan/
//! compendium-of-physical-activity, commit 5d0a5d1). The codes here are our own; the Compendium code and edition are kept with each so
//! a report can say where a MET came from.

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
/// Med Sci Sports Exerc 43:1575).
static TABLE: &[ActivityDef] = &[
    a(
        "aerobics_general",
        "aerobic exercise class, general",
        7.3,
        "03015",
    ),
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
        "badminton",
        "badminton, social singles and doubles, general",
        5.5,
        "15030",
    ),
    a("basketball", "basketball, general", 6.5, "15055"),
    a("boxing_punching_bag", "boxing, punching bag", 5.5, "15110"),
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
        "circuit_training_moderate",
        "circuit training, moderate effort",
        4.3,
        "02035",
    ),
    a(
        "circuit_training_vigorous",
        "circuit training with some aerobic movement and minimal rest, vigorous",
        8.0,
        "02040",
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
    a("hiking", "hiking, cross country", 6.0, "17080"),
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
    a("kayaking", "kayaking, moderate effort", 5.0, "18100"),
    a("mowing_lawn", "mowing the lawn, general", 5.5, "08095"),
    a("pilates", "pilates, general", 3.0, "02105"),
    a(
        "raking",
        "raking lawn or leaves, moderate effort",
        3.8,
        "08160",
    ),
    a(
        "rock_climbing",
        "rock climbing, ascending or traversing, low-to-moderate difficulty",
        5.8,
        "15537",
    ),
    a(
        "rowing_machine_moderate",
        "rowing machine, general, moderate effort",
        4.8,
        "02071",
    ),
    a(
        "rowing_machine_vigorous",
        "rowing machine, general, vigorous effort",
        6.0,
        "02070",
    ),
    a(
        "running_10mph",
        "running, 10 mph (6 min/mile)",
        14.5,
        "12120",
    ),
    a("running_4mph", "running, 4 mph (15 min/mile)", 6.0, "12029"),
    a("running_5mph", "running, 5 mph (12 min/mile)", 8.3, "12030"),
    a(
        "running_6_7mph",
        "running, 6.7 mph (9 min/mile)",
        10.5,
        "12060",
    ),
    a("running_6mph", "running, 6 mph (10 min/mile)", 9.8, "12050"),
    a(
        "running_7_5mph",
        "running, 7.5 mph (8 min/mile)",
        11.8,
        "12080",
    ),
    a(
        "running_7mph",
        "running, 7 mph (8.5 min/mile)",
        11.0,
        "12070",
    ),
    a(
        "running_8mph",
        "running, 8 mph (7.5 min/mile)",
        11.8,
        "12090",
    ),
    a(
        "running_9mph",
        "running, 9 mph (6.5 min/mile)",
        12.8,
        "12110",
    ),
    // 12150 "running, (Taylor code 200)", 8.0: the Compendium's general running entry.
    a("running_general", "running, general", 8.0, "12150"),
    a("skating_ice", "ice skating, general", 7.0, "19030"),
    a("skating_roller", "roller skating", 7.0, "15590"),
    a(
        "skiing_cross_country",
        "cross-country skiing, moderate speed and effort, general",
        9.0,
        "19090",
    ),
    a(
        "skiing_cross_country_light",
        "cross-country skiing, slow or light effort",
        6.8,
        "19080",
    ),
    a("skiing_general", "skiing, general", 7.0, "19075"),
    a("soccer_casual", "soccer, casual, general", 7.0, "15610"),
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
    a("stretching", "stretching, mild", 2.3, "02101"),
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
    a("walking_5mph", "walking, 5.0 mph, level", 8.3, "17231"),
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

/// The activity with Compendium code `code` (`17190`) or our code (`walking_3mph`).
pub fn by_compendium_or_code(code: &str) -> Option<&'static ActivityDef> {
    let code = code.trim();
    TABLE
        .iter()
        .find(|d| d.compendium_code == code)
        .or_else(|| lookup(code))
}

/// A handful of common codes (the tests check each is in the table).
#[cfg(test)]
fn common_codes() -> &'static [&'static str] {
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

/// What an activity label was read as.
#[derive(Debug, Clone, PartialEq)]
pub struct Resolved {
    /// MET value.
    pub met: f64,
    /// Where the MET value comes from (`Compendium 2011 code 17190`, or the program's table).
    pub source: String,
}

/// The program's own activity labels (`activities:` in program.yaml), normalised.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct LocalTable {
    entries: Vec<(String, LocalEntry)>,
}

/// What a local label stands for.
#[derive(Debug, Clone, PartialEq)]
pub enum LocalEntry {
    /// An activity of the tool's table.
    Compendium(&'static ActivityDef),
    /// A MET value of the program's own.
    Met(f64),
}

impl LocalTable {
    /// Adds a label.
    pub fn insert(&mut self, label: &str, entry: LocalEntry) {
        self.entries.push((normalise(label), entry));
    }

    fn get(&self, norm: &str) -> Option<&LocalEntry> {
        self.entries.iter().find(|(l, _)| l == norm).map(|(_, e)| e)
    }

    /// The labels, normalised.
    fn labels(&self) -> impl Iterator<Item = &str> {
        self.entries.iter().map(|(l, _)| l.as_str())
    }
}

/// A label in one canonical spelling: lowercase, every run of characters other than letters,
/// digits and `.` (or a `.` not between digits) as one space; `km/h` and `kph` as `kmh`.
pub fn normalise(label: &str) -> String {
    let lower = label
        .trim()
        .to_lowercase()
        .replace("km/h", "kmh")
        .replace("mi/h", "mph");
    let chars: Vec<char> = lower.chars().collect();
    let mut out = String::with_capacity(lower.len());
    for (i, &c) in chars.iter().enumerate() {
        // `3.5`, `3,5`, and our codes' `3_5` are decimal numbers.
        let decimal_point = matches!(c, '.' | ',' | '_')
            && i > 0
            && chars[i - 1].is_ascii_digit()
            && chars.get(i + 1).is_some_and(|n| n.is_ascii_digit());
        if c.is_alphanumeric() || decimal_point {
            // A number written against its unit (`3.5mph`) is split from it.
            if let Some(&p) = chars.get(i.wrapping_sub(1))
                && i > 0
                && (p.is_ascii_digit() != c.is_ascii_digit())
                && !matches!(c, '.' | ',' | '_')
                && !matches!(p, '.' | ',' | '_')
                && !out.ends_with(' ')
            {
                out.push(' ');
            }
            out.push(if matches!(c, ',' | '_') { '.' } else { c });
        } else if !out.is_empty() && !out.ends_with(' ') {
            out.push(' ');
        }
    }
    out.trim_end().replace("kph", "kmh")
}

/// Kilometres per mile (international mile, exactly 1609.344 m).
const KM_PER_MILE: f64 = 1.609_344;

/// Resolves an activity label: the program's table first, then our codes, then the natural
/// labels people and devices write (activity with a speed in mph or km/h, or an intensity, in
/// any case, spacing and punctuation: `brisk walk`, `Walking 3.5 mph`, `cycling, moderate`,
/// `Strength training`).
pub fn resolve(label: &str, local: &LocalTable) -> Option<Resolved> {
    let norm = normalise(label);
    let from_def = |d: &ActivityDef| Resolved {
        met: d.met,
        source: d.met_source(),
    };
    if let Some(e) = local.get(&norm) {
        return Some(match e {
            LocalEntry::Compendium(d) => from_def(d),
            LocalEntry::Met(m) => Resolved {
                met: *m,
                source: "program.yaml activities table".into(),
            },
        });
    }
    lookup(label)
        .or_else(|| lookup(&norm.replace(' ', "_")))
        .or_else(|| recognise(&norm))
        .map(from_def)
}

/// Reads a natural label (already [`normalise`]d) as an activity of the table.
pub fn recognise(norm: &str) -> Option<&'static ActivityDef> {
    let words: Vec<&str> = norm.split(' ').collect();
    let has = |w: &[&str]| words.iter().any(|x| w.contains(x));
    let starts = |p: &[&str]| words.iter().any(|x| p.iter().any(|p| x.starts_with(p)));
    // A speed: a number followed by mph or km/h (converted to mph).
    let mut mph = None;
    for pair in words.windows(2) {
        if let Ok(v) = pair[0].parse::<f64>() {
            match pair[1] {
                "mph" | "mi" | "miles" => mph = Some(v),
                "kmh" | "km" => mph = Some(v / KM_PER_MILE),
                _ => {}
            }
        }
    }
    enum Effort {
        Unsaid,
        VerySlow,
        Slow,
        Leisure,
        Light,
        Moderate,
        Brisk,
        VeryBrisk,
        Vigorous,
    }
    let very = has(&["very"]);
    let effort = if has(&["stroll", "strolling"]) || very && has(&["slow"]) {
        Effort::VerySlow
    } else if very && has(&["brisk", "fast"]) {
        Effort::VeryBrisk
    } else if has(&[
        "vigorous",
        "vigorously",
        "hard",
        "intense",
        "high",
        "fast",
        "heavy",
        "power",
        "race",
        "racing",
    ]) {
        Effort::Vigorous
    } else if has(&["brisk", "briskly", "quick"]) {
        Effort::Brisk
    } else if has(&["moderate", "moderately", "medium", "normal", "average"]) {
        Effort::Moderate
    } else if has(&[
        "leisure",
        "leisurely",
        "pleasure",
        "casual",
        "commute",
        "commuting",
    ]) {
        Effort::Leisure
    } else if has(&["slow", "slowly"]) {
        Effort::Slow
    } else if has(&["light", "easy", "gentle", "low"]) {
        Effort::Light
    } else {
        Effort::Unsaid
    };
    let code = if starts(&["water aerobic", "aqua"])
        || has(&["aquafit", "aquarobics"])
        || (has(&["water", "aqua"]) && starts(&["aerobic"]))
    {
        "water_aerobics"
    } else if has(&["dog"]) && starts(&["walk"]) {
        "walking_dog"
    } else if starts(&["stair", "steps"]) && !has(&["machine"]) || has(&["stairmaster", "stairs"]) {
        match effort {
            Effort::Vigorous | Effort::Brisk | Effort::VeryBrisk => "stair_climbing_fast",
            _ => "stair_climbing",
        }
    } else if starts(&["walk"]) {
        match mph {
            Some(v) if v < 2.0 => "walking_slow",
            Some(v) if v < 2.5 => "walking_2mph",
            Some(v) if v < 2.8 => "walking_2_5mph",
            Some(v) if v < 3.3 => "walking_3mph",
            Some(v) if v < 3.8 => "walking_brisk_3_5mph",
            Some(v) if v < 4.3 => "walking_very_brisk_4mph",
            Some(v) if v < 4.8 => "walking_4_5mph",
            Some(v) if v <= 6.0 => "walking_5mph",
            Some(_) => return None,
            None => match effort {
                Effort::VerySlow => "walking_slow",
                Effort::Slow | Effort::Light => "walking_2mph",
                Effort::Leisure => "walking_for_pleasure",
                Effort::Unsaid | Effort::Moderate => "walking_3mph",
                Effort::Brisk => "walking_brisk_3_5mph",
                Effort::VeryBrisk | Effort::Vigorous => "walking_very_brisk_4mph",
            },
        }
    } else if starts(&["jog"]) && mph.is_none() {
        "jogging"
    } else if starts(&["run", "jog", "treadmill"]) {
        match mph {
            Some(v) if v < 3.5 => return None,
            Some(v) if v < 4.5 => "running_4mph",
            Some(v) if v < 5.5 => "running_5mph",
            Some(v) if v < 6.35 => "running_6mph",
            Some(v) if v < 6.85 => "running_6_7mph",
            Some(v) if v < 7.25 => "running_7mph",
            Some(v) if v < 7.75 => "running_7_5mph",
            Some(v) if v < 8.5 => "running_8mph",
            Some(v) if v < 9.5 => "running_9mph",
            Some(v) if v <= 10.5 => "running_10mph",
            Some(_) => return None,
            None => match effort {
                Effort::Slow | Effort::Light | Effort::Leisure | Effort::VerySlow => "jogging",
                _ => "running_general",
            },
        }
    } else if starts(&["cycl", "bik", "bicycl", "spin"]) {
        if has(&[
            "stationary",
            "indoor",
            "spinning",
            "spin",
            "exercise",
            "static",
            "trainer",
        ]) {
            "cycling_stationary"
        } else {
            match mph {
                Some(v) if v < 10.0 => "cycling_leisure",
                Some(v) if v < 12.0 => "cycling_10_12mph",
                Some(v) if v < 14.0 => "cycling_12_14mph",
                Some(v) if v < 16.0 => "cycling_14_16mph",
                Some(_) => return None,
                None => match effort {
                    Effort::Unsaid => "cycling_general",
                    Effort::VerySlow | Effort::Slow | Effort::Leisure => "cycling_leisure",
                    Effort::Light => "cycling_10_12mph",
                    Effort::Moderate => "cycling_12_14mph",
                    Effort::Brisk | Effort::VeryBrisk | Effort::Vigorous => "cycling_14_16mph",
                },
            }
        }
    } else if starts(&["swim"]) {
        if has(&["breaststroke", "breast"]) {
            "swimming_breaststroke"
        } else if has(&["laps", "lap", "lengths", "freestyle", "crawl"])
            || !matches!(
                effort,
                Effort::Unsaid | Effort::Leisure | Effort::Slow | Effort::VerySlow | Effort::Light
            )
        {
            match effort {
                Effort::Vigorous | Effort::VeryBrisk | Effort::Brisk => "swimming_laps_vigorous",
                _ => "swimming_laps_moderate",
            }
        } else {
            "swimming_leisure"
        }
    } else if starts(&[
        "strength",
        "weight",
        "resistance",
        "lifting",
        "weightlifting",
        "gym",
    ]) || has(&["weights"])
    {
        match effort {
            Effort::Vigorous | Effort::VeryBrisk => "strength_training_vigorous",
            _ => "strength_training",
        }
    } else if starts(&["yoga"]) {
        if has(&["power", "vinyasa", "ashtanga"]) {
            "yoga_power"
        } else {
            "yoga_hatha"
        }
    } else if starts(&["pilates"]) {
        "pilates"
    } else if has(&["tai", "taichi", "qigong", "qi"])
        && (has(&["chi", "taichi"]) || has(&["gong", "qigong"]))
    {
        "tai_chi"
    } else if starts(&["elliptical", "crosstrainer"]) || has(&["cross"]) && has(&["trainer"]) {
        "elliptical_moderate"
    } else if starts(&["aerobic"]) {
        match effort {
            Effort::Vigorous => "aerobics_high_impact",
            Effort::Light | Effort::Slow | Effort::Leisure => "aerobics_low_impact",
            _ => "aerobics_general",
        }
    } else if starts(&["calisthenic", "bodyweight"]) {
        match effort {
            Effort::Vigorous | Effort::Brisk | Effort::VeryBrisk => "calisthenics_vigorous",
            _ => "calisthenics_moderate",
        }
    } else if has(&["hiit"]) || has(&["interval", "intervals"]) && !has(&["walk", "walking"]) {
        // High-intensity interval training: the Compendium's vigorous circuit training
        // (aerobic movement with minimal rest) is its nearest entry.
        "circuit_training_vigorous"
    } else if starts(&["circuit", "bootcamp"]) || has(&["boot"]) && has(&["camp"]) {
        match effort {
            Effort::Vigorous | Effort::Brisk | Effort::VeryBrisk => "circuit_training_vigorous",
            _ => "circuit_training_moderate",
        }
    } else if starts(&["rower", "erg"])
        || starts(&["rowing"]) && has(&["machine", "indoor", "stationary", "ergometer"])
    {
        match effort {
            Effort::Vigorous | Effort::Brisk | Effort::VeryBrisk => "rowing_machine_vigorous",
            _ => "rowing_machine_moderate",
        }
    } else if starts(&["ski"]) {
        if has(&["cross", "country", "nordic", "xc"]) || starts(&["crosscountry"]) {
            match effort {
                Effort::Light | Effort::Slow | Effort::VerySlow | Effort::Leisure => {
                    "skiing_cross_country_light"
                }
                _ => "skiing_cross_country",
            }
        } else {
            "skiing_general"
        }
    } else if starts(&["hik", "hike"]) {
        "hiking"
    } else if starts(&["stretch", "mobility", "flexibility"]) {
        "stretching"
    } else if starts(&["badminton"]) {
        "badminton"
    } else if starts(&["basketball"]) {
        "basketball"
    } else if starts(&["soccer"]) {
        "soccer_casual"
    } else if has(&["boxing"]) {
        // Fitness boxing: the punching bag (5.5 MET), not a bout in the ring (12.8): where a
        // label leaves the effort open, the lower value, so logged exercise never inflates
        // the expenditure the report's advice rests on.
        "boxing_punching_bag"
    } else if starts(&["climb", "boulder"]) && !has(&["hill", "hills"]) {
        // The low-to-moderate entry, for the same reason.
        "rock_climbing"
    } else if starts(&["skat", "rollerblad", "inline"]) {
        if has(&["ice"]) {
            "skating_ice"
        } else {
            "skating_roller"
        }
    } else if starts(&["kayak"]) {
        "kayaking"
    } else if starts(&["danc"]) {
        "dancing"
    } else if starts(&["golf"]) {
        "golf"
    } else if starts(&["tennis"]) {
        "tennis"
    } else if starts(&["garden", "weeding"]) {
        "gardening"
    } else if starts(&["mow"]) {
        "mowing_lawn"
    } else if starts(&["rak"]) {
        "raking"
    } else if starts(&["vacuum", "hoover"]) {
        "vacuuming"
    } else if starts(&["housework", "cleaning", "chores", "tidying"]) {
        match effort {
            Effort::Light | Effort::Slow | Effort::Leisure => "housework_light",
            _ => "housework_moderate",
        }
    } else {
        return None;
    };
    lookup(code)
}

/// Labels the recognition reads, offered as suggestions (each resolves; a test checks).
pub const NATURAL_LABELS: &[&str] = &[
    "walking",
    "brisk walk",
    "walking 3.5 mph",
    "walking 5 km/h",
    "slow walk",
    "dog walk",
    "running",
    "running 6 mph",
    "jogging",
    "cycling",
    "cycling moderate",
    "stationary bike",
    "swimming",
    "swimming laps",
    "strength training",
    "yoga",
    "pilates",
    "dancing",
    "gardening",
    "housework",
    "elliptical",
    "aerobics",
    "water aerobics",
    "stair climbing",
    "tennis",
    "golf",
    "tai chi",
    "hiking",
    "rowing machine",
    "circuit training",
    "stretching",
    "cross-country skiing",
    "basketball",
    "badminton",
    "soccer",
    "rock climbing",
    "skating",
    "kayaking",
];

/// Up to `n` known labels nearest to `label` (edit distance between normalised labels), for
/// "did you mean" hints: the program's own labels and [`NATURAL_LABELS`].
pub fn suggestions(label: &str, local: &LocalTable, n: usize) -> Vec<String> {
    let norm = normalise(label);
    let mut scored: Vec<(usize, String)> = local
        .labels()
        .map(str::to_string)
        .chain(NATURAL_LABELS.iter().map(|l| l.to_string()))
        .map(|k| {
            // A label the query begins is near (`zumba` → `zumba gold`).
            let prefix: String = k.chars().take(norm.chars().count()).collect();
            let d = edit_distance(&norm, &k).min(edit_distance(&norm, &prefix) + 1);
            (d, k)
        })
        .collect();
    scored.sort();
    scored.dedup_by(|a, b| a.1 == b.1);
    scored.into_iter().take(n).map(|(_, k)| k).collect()
}

/// Levenshtein distance over characters.
pub(crate) fn edit_distance(a: &str, b: &str) -> usize {
    let b: Vec<char> = b.chars().collect();
    let mut prev: Vec<usize> = (0..=b.len()).collect();
    let mut cur = vec![0; b.len() + 1];
    for (i, ca) in a.chars().enumerate() {
        cur[0] = i + 1;
        for (j, &cb) in b.iter().enumerate() {
            cur[j + 1] = (prev[j] + usize::from(ca != cb))
                .min(prev[j + 1] + 1)
                .min(cur[j] + 1);
        }
        std::mem::swap(&mut prev, &mut cur);
    }
    prev[b.len()]
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
        // Ainsworth et al. 2011, Med Sci Sports Exerc 43:1575.
        let w = lookup("walking_3mph").unwrap();
        assert_eq!((w.met, w.compendium_code), (3.5, "17190"));
        assert_eq!(w.met_source(), "Compendium 2011 code 17190");
        assert_eq!(lookup("walking_brisk_3_5mph").unwrap().met, 4.3);
        assert_eq!(lookup("cycling_10_12mph").unwrap().met, 6.8);
        assert_eq!(lookup("swimming_laps_moderate").unwrap().met, 5.8);
        assert_eq!(lookup("yoga_hatha").unwrap().met, 2.5);
        assert_eq!(lookup("cycling_leisure").unwrap().compendium_code, "01010");
        let hiking = lookup("hiking").unwrap();
        assert_eq!((hiking.met, hiking.compendium_code), (6.0, "17080"));
        let rowing = lookup("rowing_machine_moderate").unwrap();
        assert_eq!((rowing.met, rowing.compendium_code), (4.8, "02071"));
        let stretching = lookup("stretching").unwrap();
        assert_eq!((stretching.met, stretching.compendium_code), (2.3, "02101"));
        let hiit = lookup("circuit_training_vigorous").unwrap();
        assert_eq!((hiit.met, hiit.compendium_code), (8.0, "02040"));
    }

    fn code_of(label: &str) -> Option<&'static str> {
        recognise(&normalise(label)).map(|d| d.code)
    }

    #[test]
    fn natural_labels_are_recognised() {
        for (label, code) in [
            ("brisk walk", "walking_brisk_3_5mph"),
            ("Walking 3.5 mph", "walking_brisk_3_5mph"),
            ("walking, 3.5mph", "walking_brisk_3_5mph"),
            ("WALKING-3MPH", "walking_3mph"),
            ("Walking-Brisk-3_5mph", "walking_brisk_3_5mph"),
            // 5 km/h = 3.11 mph (1 mile = 1.609344 km): the 2.8–3.2 mph entry.
            ("walk 5 km/h", "walking_3mph"),
            ("Walking (6,5 kph)", "walking_very_brisk_4mph"),
            ("walking", "walking_3mph"),
            ("Cycling, moderate", "cycling_12_14mph"),
            ("bike ride 13 mph", "cycling_12_14mph"),
            ("cycling", "cycling_general"),
            ("Spin class", "cycling_stationary"),
            ("Strength training", "strength_training"),
            ("weight lifting (heavy)", "strength_training_vigorous"),
            ("running 6 mph", "running_6mph"),
            ("Run 10 km/h", "running_6mph"),
            ("easy jog", "jogging"),
            ("swim laps - vigorous", "swimming_laps_vigorous"),
            ("Swimming", "swimming_leisure"),
            ("Power yoga", "yoga_power"),
            ("Tai Chi", "tai_chi"),
            ("dog walk", "walking_dog"),
            ("Water aerobics", "water_aerobics"),
        ] {
            assert_eq!(code_of(label), Some(code), "{label}");
        }
        // Labels of fitness trackers' activity exports (the common ones that were unknown).
        for (label, code) in [
            ("Hiking", "hiking"),
            ("HIIT", "circuit_training_vigorous"),
            (
                "High Intensity Interval Training",
                "circuit_training_vigorous",
            ),
            ("Circuit training", "circuit_training_moderate"),
            ("Rowing Machine", "rowing_machine_moderate"),
            ("indoor rowing, vigorous", "rowing_machine_vigorous"),
            ("Cross Country Skiing", "skiing_cross_country"),
            ("Skiing", "skiing_general"),
            ("Badminton", "badminton"),
            ("Basketball", "basketball"),
            ("Soccer", "soccer_casual"),
            ("Stretching", "stretching"),
            ("Climbing", "rock_climbing"),
            ("Bouldering", "rock_climbing"),
            ("Ice Skating", "skating_ice"),
            ("Inline skating", "skating_roller"),
            ("Kayaking", "kayaking"),
            ("Boxing", "boxing_punching_bag"),
            // Earlier rules still win: stairs, intervals of walking.
            ("Stair Stepper", "stair_climbing"),
            ("walking intervals", "walking_3mph"),
        ] {
            assert_eq!(code_of(label), Some(code), "{label}");
        }
        // Left unknown: `football` (soccer, or the American game?), `rowing` on the water or a
        // machine, hill climbing.
        for label in [
            "zumba-ish",
            "walking 9 mph",
            "",
            "sleep",
            "football",
            "rowing",
            "hill climbing",
        ] {
            assert_eq!(code_of(label), None, "{label}");
        }
        for label in NATURAL_LABELS {
            assert!(resolve(label, &LocalTable::default()).is_some(), "{label}");
        }
    }

    #[test]
    fn the_program_table_comes_first_and_gives_its_source() {
        let mut local = LocalTable::default();
        local.insert("Zumba Gold", LocalEntry::Met(5.5));
        local.insert(
            "walk",
            LocalEntry::Compendium(by_compendium_or_code("17200").unwrap()),
        );
        assert_eq!(
            resolve("zumba gold", &local),
            Some(Resolved {
                met: 5.5,
                source: "program.yaml activities table".into()
            })
        );
        // Ainsworth et al. 2011: 17200 walking 3.5 mph, brisk = 4.3 MET.
        assert_eq!(resolve("Walk", &local).unwrap().met, 4.3);
        assert_eq!(resolve("walk", &LocalTable::default()).unwrap().met, 3.5);
        assert_eq!(
            suggestions("zumba", &local, 1),
            vec!["zumba gold".to_string()]
        );
        assert!(suggestions("wlaking", &local, 3).contains(&"walking".to_string()));
    }

    #[test]
    fn lookup_ignores_case_and_unknown_codes_are_none() {
        assert!(lookup("Walking_3MPH").is_some());
        assert!(lookup(" jogging ").is_some());
        assert!(lookup("zumba-ish").is_none());
        assert!(lookup("").is_none());
    }
}

//! The invented cast of the demo program: the employer's sites and teams, names, session titles
//! and the activities people log. Every name here is made up for this project.

use cohortpress_metric_api::Sex;

/// Sites of the invented employer, with their share of the workforce and the teams found there.
pub const SITES: [(&str, f64, &[&str]); 3] = [
    ("Kiln Row", 0.46, &["Glazing", "Maintenance", "Design"]),
    ("Harbour Depot", 0.29, &["Dispatch", "Maintenance"]),
    ("North Office", 0.25, &["Office", "Design"]),
];

/// Hand-picked names for the first participants (invented combinations; some non-ASCII on
/// purpose, so the reports are exercised with them).
pub const CURATED: [(&str, Sex); 48] = [
    ("Łucja Nguyễn-Øberg", Sex::Female),
    ("Søren Achterberg", Sex::Male),
    ("Ana-Lucía Ferreira", Sex::Female),
    ("Tomasz Adeyemi", Sex::Male),
    ("Priya Halloran", Sex::Female),
    ("Kwame Lindqvist", Sex::Male),
    ("Mei-Ling Castellanos", Sex::Female),
    ("Dafydd Morcombe", Sex::Male),
    ("Aoife Brennan-Sato", Sex::Female),
    ("Rashid Kowalski-Hart", Sex::Male),
    ("Zanele Whitcombe", Sex::Female),
    ("Matteo Oyelaran", Sex::Male),
    ("Fatima Okonjo-Lind", Sex::Female),
    ("Jonas Ekström-Bello", Sex::Male),
    ("Greta Vasquez-Holm", Sex::Female),
    ("Hamish Osei", Sex::Male),
    ("Yuki Pemberton", Sex::Female),
    ("Bartosz Quinlan", Sex::Male),
    ("Chiamaka Dufresne", Sex::Female),
    ("Émile Dzikunu", Sex::Male),
    ("Hannah Szabó", Sex::Female),
    ("Arjun Whitaker", Sex::Male),
    ("Rosa Mbatha-Kerr", Sex::Female),
    ("Desmond Nakamura", Sex::Male),
    ("Ilse Varga", Sex::Female),
    ("Iker Etxeberria", Sex::Male),
    ("Nadia Qureshi-Brandt", Sex::Female),
    ("Lars Abiodun", Sex::Male),
    ("Solveig Amankwah", Sex::Female),
    ("Oisín Kamau", Sex::Male),
    ("Bronwen Takahashi", Sex::Female),
    ("Farid Holmberg", Sex::Male),
    ("Leilani Ortega-Finch", Sex::Female),
    ("Kenji Marchetti", Sex::Male),
    ("Dagny Rautio", Sex::Female),
    ("Wiremu Alvarez", Sex::Male),
    ("Amara Lindgren", Sex::Female),
    ("Tobias Ngata", Sex::Male),
    ("Catalina Wójcik", Sex::Female),
    ("Ravi Sørensen-Clarke", Sex::Male),
    ("Shirin Abernethy", Sex::Female),
    ("Gareth Ifeanyi", Sex::Male),
    ("Thandiwe Korhonen", Sex::Female),
    ("Nikolai Barros", Sex::Male),
    ("Eilidh Moreau", Sex::Female),
    ("Mateus Oduya", Sex::Male),
    ("Noor van der Berg", Sex::Female),
    ("Renée Kapoor", Sex::Female),
];

/// Session titles, in the order they are offered.
pub const SESSION_TITLES: [&str; 16] = [
    "Starting point",
    "Reading the scale",
    "Food logging that lasts",
    "Walking more",
    "Portions and plates",
    "Sleep and shift work",
    "Eating on the road",
    "Strength at any age",
    "Stress and snacking",
    "Check-in at ten weeks",
    "When progress stalls",
    "Holidays and heatwaves",
    "Cooking for a household",
    "Keeping the habits",
    "Looking back",
    "Plans for the autumn",
];

/// An activity people log: the code (from the tool's activity table), the MET value the
/// simulation uses for its energy cost, typical minutes, and whether steps are counted.
#[derive(Debug, Clone, Copy)]
pub struct ActivityKind {
    /// Code as written in activity.csv.
    pub code: &'static str,
    /// MET value used by the simulation only (the tool looks codes up in its own table).
    pub met: f64,
    /// Shortest and longest session, minutes.
    pub minutes: (i64, i64),
    /// Walking: steps are recorded with it.
    pub walking: bool,
}

/// Codes of the tool's activity table. The simulation's MET values are the 2011 Compendium's
/// (Ainsworth et al., *Med Sci Sports Exerc* 2011;43:1575): 17190 walking 2.8–3.2 mph 3.5,
/// 17200 brisk 3.5 mph 4.3, 01010 leisure cycling 4.0, 12020 jogging 7.0, 18240 laps 5.8,
/// 03031 general dancing 7.8, 02150 hatha yoga 2.5, 02054 resistance training 3.5, 08245
/// gardening 3.8, 17133 stair climbing slow 4.0. They only shape the simulated weight change.
pub const ACTIVITIES: [ActivityKind; 10] = [
    ActivityKind {
        code: "walking_3mph",
        met: 3.5,
        minutes: (20, 60),
        walking: true,
    },
    ActivityKind {
        code: "walking_brisk_3_5mph",
        met: 4.3,
        minutes: (20, 50),
        walking: true,
    },
    ActivityKind {
        code: "cycling_leisure",
        met: 4.0,
        minutes: (20, 90),
        walking: false,
    },
    ActivityKind {
        code: "jogging",
        met: 7.0,
        minutes: (15, 45),
        walking: false,
    },
    ActivityKind {
        code: "swimming_laps_moderate",
        met: 5.8,
        minutes: (20, 60),
        walking: false,
    },
    ActivityKind {
        code: "dancing",
        met: 7.8,
        minutes: (30, 60),
        walking: false,
    },
    ActivityKind {
        code: "yoga_hatha",
        met: 2.5,
        minutes: (20, 60),
        walking: false,
    },
    ActivityKind {
        code: "strength_training",
        met: 3.5,
        minutes: (20, 50),
        walking: false,
    },
    ActivityKind {
        code: "gardening",
        met: 3.8,
        minutes: (30, 90),
        walking: false,
    },
    ActivityKind {
        code: "stair_climbing",
        met: 4.0,
        minutes: (10, 20),
        walking: false,
    },
];

/// Labels outside the activity table, written with an explicit `met` (illustrative values
/// chosen for the demo, not taken from a table).
pub const CUSTOM_ACTIVITIES: [(&str, f64); 4] = [
    ("kayaking", 5.0),
    ("table tennis", 4.0),
    ("five-a-side football", 7.0),
    ("pilates class", 3.0),
];

/// First and last names taken apart from [`CURATED`], for participants past the 48th.
pub fn name_parts(sex: Sex) -> (Vec<&'static str>, Vec<&'static str>) {
    let mut first = Vec::new();
    let mut last = Vec::new();
    for (full, s) in CURATED {
        let (f, l) = full.split_once(' ').unwrap_or((full, "Doe"));
        if s == sex {
            first.push(f);
        }
        last.push(l);
    }
    (first, last)
}

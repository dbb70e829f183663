//! The cohort plan and the day-by-day simulation of each invented participant.
//!
//! Each participant's true weight follows a simple energy balance: intake minus expenditure,
//! divided by an energy density of weight change, every day. Expenditure is recomputed from the
//! current weight, so loss slows as weight falls. What the participant *records* is then derived
//! from the truth the way real records differ from it: noisy, irregular weigh-ins with a weekly
//! rhythm, under-reported and thinning food logs, activity, session attendance and two rounds of
//! labs. Nothing here claims to be a validated model; it only has to look like real data to the
//! metric modules.

use super::people::{ACTIVITIES, CURATED, CUSTOM_ACTIVITIES, SITES, name_parts};
use super::rng::Rng;
use chrono::{Datelike, Days, NaiveDate, Weekday};
use cohortpress_metric_api::Sex;

/// kg per lb, exact (international yard and pound agreement, 1959).
pub const KG_PER_LB: f64 = 0.453_592_37;

/// Dates of the invented program.
#[derive(Debug, Clone)]
pub struct Scenario {
    /// First day.
    pub start: NaiveDate,
    /// Last day.
    pub end: NaiveDate,
    /// The 16 sessions offered: weekly for ten weeks, then fortnightly.
    pub sessions: Vec<NaiveDate>,
}

impl Scenario {
    /// Steady Ground 2026: 1 April to 30 September 2026, sessions on Tuesdays from 7 April.
    pub fn steady_ground() -> Self {
        let start = date(2026, 4, 1);
        let end = date(2026, 9, 30);
        let first = date(2026, 4, 7);
        let sessions = (0..16u64)
            .map(|k| {
                let week = if k < 10 { k } else { 10 + 2 * (k - 10) };
                first + Days::new(7 * week)
            })
            .collect();
        Scenario {
            start,
            end,
            sessions,
        }
    }
}

/// A date known to be valid.
pub fn date(y: i32, m: u32, d: u32) -> NaiveDate {
    NaiveDate::from_ymd_opt(y, m, d).expect("valid calendar date")
}

/// How a participant's adherence to the prescribed deficit develops.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum CourseKind {
    /// Adherence fades over months: the usual plateau after three to four months.
    Drifter,
    /// Keeps to the deficit: steady loss that slows as expenditure falls.
    Adherer,
    /// Loses for two to three months, then eats above the old maintenance and regains.
    Regainer,
    /// Barely changes intake.
    NonResponder,
}

/// Glycaemic range at baseline.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Glycaemia {
    /// HbA1c below 5.7 %.
    Normal,
    /// HbA1c 5.7–6.4 % (ADA prediabetes range).
    Prediabetes,
    /// HbA1c 6.5 % or more (ADA diabetes range).
    Diabetes,
}

/// A realistic input error planted on purpose (see sample-program/README.md).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Defect {
    /// A weigh-in written in lb in a file whose rows say kg (a ×2.2 jump).
    LbInKgFile,
    /// A weight written with a decimal comma and three decimals, quoted: `"81,400"` (a thousands
    /// separator or a decimal comma: not read).
    DecimalComma,
    /// A weight of a tenth of the true value (a missed digit).
    ImpossibleWeight,
    /// A weigh-in whose year is one too high, so it lies in the future.
    FutureDate,
    /// A weigh-in row with its unit field left out.
    MissingField,
    /// An intake row written twice.
    DuplicateIntake,
    /// An activity with a misspelt code and no MET value.
    UnknownActivity,
}

/// A participant added to a program with planted errors (the bundled sample) so that its
/// reports show cautions the rest of the cohort never reaches. Both are fictional and set by
/// hand rather than drawn, and come after everyone else (after the folder without a profile),
/// so adding them changed no other participant's records.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Showcase {
    /// Keeps to half the program's deficit for four and a half months, then eats far less
    /// (1,250 kcal a day below her starting maintenance) from mid-August: a loss above 1 % of
    /// body weight, and above 1 kg, a week through September, with a food log below the floor.
    FastLoser,
    /// Aged 72 at enrolment, BMI 34, adherence fading as for most: the age cautions.
    Older,
}

/// Name, sex, site (index into `SITES`), course and starting BMI of each [`Showcase`]
/// participant, in the order they are added.
pub const SHOWCASE: [(Showcase, &str, Sex, usize, CourseKind, f64); 2] = [
    (
        Showcase::FastLoser,
        "Ingrid Achebe-Morrow",
        Sex::Female,
        0,
        CourseKind::Adherer,
        38.0,
    ),
    (
        Showcase::Older,
        "Bartholomew Quaye-Lindgren",
        Sex::Male,
        2,
        CourseKind::Drifter,
        34.0,
    ),
];

/// Day of the program (0 = enrolment) from which the [`Showcase::FastLoser`] eats far less.
const CRASH_FROM_DAY: f64 = 140.0;
/// How far below the starting maintenance the [`Showcase::FastLoser`] then eats, kcal/d.
const CRASH_DEFICIT: f64 = 1250.0;
/// Age at enrolment of the [`Showcase::Older`] participant.
const OLDER_AGE: i64 = 72;

/// All defects that go into participant files, in assignment order.
pub const ROW_DEFECTS: [Defect; 7] = [
    Defect::LbInKgFile,
    Defect::DecimalComma,
    Defect::ImpossibleWeight,
    Defect::FutureDate,
    Defect::MissingField,
    Defect::DuplicateIntake,
    Defect::UnknownActivity,
];

/// The misspelt activity code planted by [`Defect::UnknownActivity`].
pub const UNKNOWN_ACTIVITY: &str = "zumba_gold";

/// Column order of a participant's intake.csv.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum IntakeLayout {
    /// `date,kcal`
    KcalOnly,
    /// `date,kcal,carbs_g,fat_g,protein_g,free_sugars_g`
    Macros,
    /// `date,protein_g,fat_g,carbs_g,kcal,free_sugars_g`
    MacrosReordered,
    /// `kcal,date,carbs_g,protein_g,fat_g`
    KcalFirstNoSugars,
}

/// What is decided for the whole cohort before anyone is simulated.
#[derive(Debug, Clone)]
pub struct Plan {
    /// 0-based position.
    pub index: usize,
    /// `SG-001`, …
    pub id: String,
    /// Display name.
    pub name: String,
    /// Sex.
    pub sex: Sex,
    /// Site.
    pub site: &'static str,
    /// Teams at that site.
    pub site_teams: &'static [&'static str],
    /// Course of adherence.
    pub course: CourseKind,
    /// Baseline glycaemic range.
    pub glycaemia: Glycaemia,
    /// Takes glucose-lowering medication (profile flag).
    pub medication: bool,
    /// Leaves the program early.
    pub withdraws: bool,
    /// Has a measured body-fat percentage in the profile.
    pub body_fat: bool,
    /// Has a personal weight-change target.
    pub target_override: bool,
    /// intake.csv layout.
    pub intake_layout: IntakeLayout,
    /// Defects planted in this participant's files.
    pub defects: Vec<Defect>,
    /// Added to show a caution (see [`Showcase`]); `None` for everyone else.
    pub showcase: Option<Showcase>,
}

/// Participant id for a 0-based position.
pub fn participant_id(index: usize) -> String {
    format!("SG-{:03}", index + 1)
}

/// Counts that add up to `n` in the given proportions (largest remainder).
fn apportion(n: usize, shares: &[f64]) -> Vec<usize> {
    let mut counts: Vec<usize> = shares
        .iter()
        .map(|s| (s * n as f64).floor() as usize)
        .collect();
    let mut rest = n - counts.iter().sum::<usize>();
    let mut order: Vec<usize> = (0..shares.len()).collect();
    let frac = |i: usize| shares[i] * n as f64 - counts[i] as f64;
    order.sort_by(|&a, &b| frac(b).total_cmp(&frac(a)).then(a.cmp(&b)));
    for &i in order.iter().cycle() {
        if rest == 0 {
            break;
        }
        counts[i] += 1;
        rest -= 1;
    }
    counts
}

/// A shuffled list holding `counts[k]` copies of `values[k]`.
fn shuffled<T: Copy>(rng: &mut Rng, values: &[T], counts: &[usize]) -> Vec<T> {
    let mut v = Vec::with_capacity(counts.iter().sum());
    for (x, &c) in values.iter().zip(counts) {
        v.extend(std::iter::repeat_n(*x, c));
    }
    rng.shuffle(&mut v);
    v
}

/// Decides sites, courses, lab ranges, withdrawals and defect hosts for `n` participants.
pub fn plan_cohort(n: usize, seed: u64, with_defects: bool) -> Vec<Plan> {
    let mut rng = Rng::stream(seed, 0);
    let sites = shuffled(
        &mut rng,
        &[0usize, 1, 2],
        &apportion(n, &SITES.map(|s| s.1)),
    );
    let courses = shuffled(
        &mut rng,
        &[
            CourseKind::Drifter,
            CourseKind::Adherer,
            CourseKind::Regainer,
            CourseKind::NonResponder,
        ],
        &apportion(n, &[0.60, 0.17, 0.13, 0.10]),
    );
    let glyc = shuffled(
        &mut rng,
        &[
            Glycaemia::Normal,
            Glycaemia::Prediabetes,
            Glycaemia::Diabetes,
        ],
        &apportion(n, &[0.79, 0.17, 0.04]),
    );
    let body_fat = shuffled(&mut rng, &[true, false], &apportion(n, &[0.12, 0.88]));
    let target = shuffled(&mut rng, &[true, false], &apportion(n, &[0.04, 0.96]));

    // Defect hosts first (they must stay enrolled to the end), then withdrawals among the rest.
    let mut order: Vec<usize> = (0..n).collect();
    rng.shuffle(&mut order);
    let hosts: Vec<usize> = if with_defects {
        (0..ROW_DEFECTS.len()).map(|k| order[k % n]).collect()
    } else {
        Vec::new()
    };
    let free: Vec<usize> = order
        .iter()
        .copied()
        .filter(|i| !hosts.contains(i))
        .collect();
    let n_withdraw = ((n as f64 * 0.075).round() as usize).min(free.len());
    let withdrawn = &free[..n_withdraw];
    // Two people with their own column order in intake.csv (not defect hosts: any order is fine).
    let reordered = &free[n_withdraw..];

    let (first_f, last_names) = name_parts(Sex::Female);
    let (first_m, _) = name_parts(Sex::Male);
    let mut first_medicated = true;
    (0..n)
        .map(|i| {
            let (name, sex) = if i < CURATED.len() {
                (CURATED[i].0.to_string(), CURATED[i].1)
            } else {
                let sex = if rng.chance(0.55) {
                    Sex::Female
                } else {
                    Sex::Male
                };
                let firsts = if sex == Sex::Female {
                    &first_f
                } else {
                    &first_m
                };
                (
                    format!("{} {}", rng.pick(firsts), rng.pick(&last_names)),
                    sex,
                )
            };
            let glycaemia = glyc[i];
            let medication =
                glycaemia == Glycaemia::Diabetes && std::mem::take(&mut first_medicated);
            let intake_layout = if reordered.first() == Some(&i) {
                IntakeLayout::MacrosReordered
            } else if reordered.get(1) == Some(&i) {
                IntakeLayout::KcalFirstNoSugars
            } else if rng.chance(0.35) {
                IntakeLayout::Macros
            } else {
                IntakeLayout::KcalOnly
            };
            let defects = ROW_DEFECTS
                .iter()
                .zip(&hosts)
                .filter(|(_, h)| **h == i)
                .map(|(d, _)| *d)
                .collect();
            Plan {
                index: i,
                id: participant_id(i),
                name,
                sex,
                site: SITES[sites[i]].0,
                site_teams: SITES[sites[i]].2,
                course: courses[i],
                glycaemia,
                medication,
                withdraws: withdrawn.contains(&i),
                body_fat: body_fat[i],
                target_override: target[i],
                intake_layout,
                defects,
                showcase: None,
            }
        })
        .chain(
            // After the folder without a profile (`participant_id(n)`), so that every id
            // before them is what it was.
            SHOWCASE.iter().enumerate().filter(|_| with_defects).map(
                |(k, &(showcase, name, sex, site, course, _))| Plan {
                    index: n + 1 + k,
                    id: participant_id(n + 1 + k),
                    name: name.to_string(),
                    sex,
                    site: SITES[site].0,
                    site_teams: SITES[site].2,
                    course,
                    glycaemia: Glycaemia::Normal,
                    medication: false,
                    withdraws: false,
                    body_fat: false,
                    target_override: false,
                    intake_layout: IntakeLayout::KcalOnly,
                    defects: Vec::new(),
                    showcase: Some(showcase),
                },
            ),
        )
        .collect()
}

/// How the height is written in profile.yaml.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum HeightWritten {
    /// `168 cm`
    Cm(i64),
    /// `5 ft 6 in`
    FeetInches(i64, i64),
    /// `66 in`
    Inches(i64),
}

impl HeightWritten {
    /// The height in cm that the written form stands for.
    pub fn cm(self) -> f64 {
        match self {
            HeightWritten::Cm(c) => c as f64,
            HeightWritten::FeetInches(f, i) => (f * 12 + i) as f64 * 2.54,
            HeightWritten::Inches(i) => i as f64 * 2.54,
        }
    }
}

/// Marks on a weigh-in row that turn it into a planted defect.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum WeighMark {
    /// An ordinary row.
    Clean,
    /// Value written in lb, unit says kg.
    LbInKg,
    /// Decimal comma, quoted.
    DecimalComma,
    /// A tenth of the value.
    Impossible,
    /// Unit field left out.
    MissingUnit,
}

/// One weigh-in as recorded.
#[derive(Debug, Clone, Copy)]
pub struct WeighRow {
    /// Day.
    pub date: NaiveDate,
    /// Minutes after midnight.
    pub minute: u32,
    /// Scale reading, kg.
    pub kg: f64,
    /// Weighed at a session (source `clinic`) rather than at home.
    pub clinic: bool,
    /// Planted defect, if any.
    pub mark: WeighMark,
}

/// One intake row (a day's total or one meal), grams rounded.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct IntakeRow {
    /// Day.
    pub date: NaiveDate,
    /// Energy.
    pub kcal: i64,
    /// Carbohydrate.
    pub carbs_g: i64,
    /// Fat.
    pub fat_g: i64,
    /// Protein.
    pub protein_g: i64,
    /// Free sugars.
    pub free_sugars_g: i64,
}

/// One activity as recorded.
#[derive(Debug, Clone, Copy)]
pub struct ActivityRow {
    /// Day.
    pub date: NaiveDate,
    /// Code or label.
    pub activity: &'static str,
    /// Minutes.
    pub minutes: i64,
    /// MET written in the file (custom labels only).
    pub met: Option<f64>,
    /// Steps (walking, for people with a step counter).
    pub steps: Option<i64>,
}

/// One session offered.
#[derive(Debug, Clone, Copy)]
pub struct SessionRow {
    /// Day.
    pub date: NaiveDate,
    /// 1-based number.
    pub number: usize,
    /// Attended?
    pub attended: bool,
}

/// One lab value as written.
#[derive(Debug, Clone, Copy)]
pub struct LabRow {
    /// Day.
    pub date: NaiveDate,
    /// `hba1c` or `fasting_glucose`.
    pub test: &'static str,
    /// Value in `unit`.
    pub value: f64,
    /// Unit as written.
    pub unit: &'static str,
    /// Decimals written.
    pub decimals: usize,
}

/// A simulated participant: the profile as written and every record.
#[derive(Debug, Clone)]
pub struct Simulated {
    /// The plan it came from.
    pub plan: Plan,
    /// Team at the site.
    pub team: &'static str,
    /// Birth date (else the age is written).
    pub birth_date: Option<NaiveDate>,
    /// Age in whole years at enrolment.
    pub age: i64,
    /// Height as written.
    pub height: HeightWritten,
    /// Enrolment day.
    pub enrolled: NaiveDate,
    /// Withdrawal day.
    pub withdrew: Option<NaiveDate>,
    /// Body fat % as written.
    pub body_fat_percent: Option<i64>,
    /// Records weight in lb.
    pub unit_lb: bool,
    /// weights.csv has a time column.
    pub time_column: bool,
    /// Records.
    pub weights: Vec<WeighRow>,
    /// Records.
    pub intake: Vec<IntakeRow>,
    /// Records.
    pub activity: Vec<ActivityRow>,
    /// Records.
    pub sessions: Vec<SessionRow>,
    /// Records.
    pub labs: Vec<LabRow>,
    /// True (noise-free) morning weight on each simulated day, kg.
    pub true_weight: Vec<f64>,
}

/// Resting energy expenditure, kcal/d (Mifflin et al. 1990, *Am J Clin Nutr* 51:241).
pub fn mifflin_st_jeor(sex: Sex, kg: f64, cm: f64, age: f64) -> f64 {
    10.0 * kg + 6.25 * cm - 5.0 * age + if sex == Sex::Male { 5.0 } else { -161.0 }
}

/// Simulates one participant from its plan.
pub fn simulate(plan: &Plan, scenario: &Scenario, seed: u64) -> Simulated {
    let mut rng = Rng::stream(seed, plan.index as u64 + 1);
    let host = !plan.defects.is_empty();

    // --- profile -------------------------------------------------------------------------
    let team = *rng.pick(plan.site_teams);
    let enrolled = if rng.chance(0.8) {
        scenario.start
    } else {
        scenario.start + Days::new(rng.int(1, 19) as u64)
    };
    let age = match plan.showcase {
        Some(Showcase::Older) => {
            rng.int(24, 63);
            OLDER_AGE
        }
        _ => rng.int(24, 63),
    };
    let birth_date = rng.chance(0.8).then(|| {
        let anniversary = enrolled
            .with_year(enrolled.year() - age as i32)
            .expect("no 29 Feb");
        anniversary - Days::new(rng.int(0, 364) as u64)
    });
    let true_cm = match plan.sex {
        Sex::Female => rng.gauss(163.5, 6.5).clamp(148.0, 185.0),
        Sex::Male => rng.gauss(177.0, 7.0).clamp(158.0, 201.0),
    };
    let form = rng.f64();
    let height = if form < 0.4 {
        HeightWritten::Cm(true_cm.round() as i64)
    } else {
        let inches = (true_cm / 2.54).round() as i64;
        if form < 0.75 {
            HeightWritten::FeetInches(inches / 12, inches % 12)
        } else {
            HeightWritten::Inches(inches)
        }
    };
    let cm = height.cm();
    let bmi0 = if rng.chance(0.88) {
        rng.uniform(26.0, 40.0)
    } else if rng.chance(0.5) {
        rng.uniform(24.5, 26.0)
    } else {
        rng.uniform(40.0, 44.0)
    };
    let bmi0 = SHOWCASE
        .iter()
        .find(|c| Some(c.0) == plan.showcase)
        .map_or(bmi0, |c| c.5);
    let w0 = bmi0 * (cm / 100.0).powi(2);
    let body_fat_percent = plan.body_fat.then(|| {
        // Deurenberg, Weststrate & Seidell 1991, Br J Nutr 65:105 (adults, male = 1), plus
        // measurement scatter.
        let male = if plan.sex == Sex::Male { 1.0 } else { 0.0 };
        let bf = 1.2 * bmi0 + 0.23 * age as f64 - 10.8 * male - 5.4 + rng.gauss(0.0, 2.5);
        bf.round() as i64
    });
    let unit_lb = !host && rng.chance(1.0 / 3.0);
    let time_column = host || rng.chance(0.7);
    let withdrew = plan
        .withdraws
        .then(|| enrolled + Days::new(rng.int(45, 140) as u64));
    let last_day = match withdrew {
        Some(w) => (w - Days::new(1)).min(scenario.end),
        None => scenario.end,
    };

    // --- behaviour -----------------------------------------------------------------------
    let pal = rng.uniform(1.4, 1.7);
    // Energy density of weight change, kcal/kg: between the dynamic models' early values and
    // the static 7700 kcal/kg rule (Hall 2008, Int J Obes 32:573, from memory).
    let rho = rng.uniform(7700.0, 9000.0);
    let deficit = rng.uniform(300.0, 700.0);
    let rmr = |kg: f64| mifflin_st_jeor(plan.sex, kg, cm, age as f64);
    let maintenance0 = rmr(w0) * pal;
    let adherence: Box<dyn Fn(f64) -> f64> = match plan.course {
        CourseKind::Drifter => {
            let floor = rng.uniform(0.0, 0.3);
            let tau = rng.uniform(40.0, 80.0);
            Box::new(move |t| floor + (1.0 - floor) * (-t / tau).exp())
        }
        CourseKind::Adherer => {
            let level = rng.uniform(0.9, 1.05);
            let tau = rng.uniform(500.0, 900.0);
            Box::new(move |t| level * (-t / tau).exp())
        }
        CourseKind::Regainer => {
            let t1 = rng.uniform(60.0, 100.0);
            let ramp = rng.uniform(40.0, 70.0);
            let surplus = rng.uniform(0.4, 0.9);
            Box::new(move |t| {
                let x = ((t - t1) / ramp).clamp(0.0, 1.0);
                1.0 - x * (1.0 + surplus)
            })
        }
        CourseKind::NonResponder => {
            let level = rng.uniform(0.0, 0.15);
            Box::new(move |_| level)
        }
    };
    // The fast loser: half the program's deficit, then far less food.
    let (deficit, adherence): (f64, Box<dyn Fn(f64) -> f64>) =
        if plan.showcase == Some(Showcase::FastLoser) {
            let early = 0.5 * deficit;
            (
                1.0,
                Box::new(move |t| {
                    if t < CRASH_FROM_DAY {
                        early
                    } else {
                        CRASH_DEFICIT
                    }
                }),
            )
        } else {
            (deficit, adherence)
        };
    let weekend_extra = if rng.chance(0.5) {
        rng.uniform(100.0, 300.0)
    } else {
        0.0
    };
    // Engagement with recording fades for most people (the floor keeps some).
    let keen = plan.course == CourseKind::Adherer;
    let eng_floor = if keen {
        rng.uniform(0.7, 0.95)
    } else {
        rng.uniform(0.25, 0.8)
    };
    let eng_tau = rng.uniform(50.0, 200.0);
    let engagement = |t: f64| eng_floor + (1.0 - eng_floor) * (-t / eng_tau).exp();

    let pattern = if host {
        1
    } else if plan.showcase.is_some() {
        // Weighs in most days, so the reports have a trend to speak from.
        0
    } else {
        [0, 1, 1, 1, 1, 2][rng.below(6)]
    };
    let (p_weigh, daily) = match pattern {
        0 => (0.9, true),
        1 => (rng.uniform(2.0, 6.0) / 7.0, false),
        _ => (rng.uniform(0.07, 0.15), false),
    };
    // Day-to-day scatter of a single weight, 0.5–0.8 kg (from memory; program choice).
    let sigma = rng.uniform(0.5, 0.8);
    let morning = rng.int(360, 500) as u32;
    let no_log = !host && plan.showcase.is_none() && rng.chance(0.05);
    let p_log0 = if host {
        rng.uniform(0.7, 0.95)
    } else {
        rng.uniform(0.45, 0.95)
    };
    let log_floor = rng.uniform(0.25, 0.7);
    let log_tau = rng.uniform(40.0, 120.0);
    let meals = rng.chance(0.3);
    // Under-reporting is the rule rather than the exception (Archer, Hand & Blair 2013,
    // PLoS One 8:e76632).
    let under = rng.uniform(0.10, 0.35);
    let carb_share = rng.uniform(0.40, 0.52);
    let fat_share = rng.uniform(0.30, 0.38);
    let sugar_share = rng.uniform(0.06, 0.14);
    let no_activity = !host && rng.chance(0.05);
    let act_rate = rng.uniform(1.0, 5.0) / 7.0;
    let mut favourites: Vec<usize> = (0..ACTIVITIES.len()).collect();
    rng.shuffle(&mut favourites);
    favourites.truncate(rng.int(2, 3) as usize);
    let step_counter = rng.chance(0.5);
    let p_attend0 = rng.uniform(0.6, 0.95);

    // --- day by day ----------------------------------------------------------------------
    let days = (last_day - enrolled).num_days().max(0) as usize + 1;
    let mut weights = Vec::with_capacity(days);
    let mut intake = Vec::with_capacity(days * 2);
    let mut activity = Vec::with_capacity(days / 2);
    let mut sessions = Vec::with_capacity(16);
    let mut next_session = scenario.sessions.iter().position(|&s| s >= enrolled);
    let mut w = w0;
    let mut true_weight = Vec::with_capacity(days);
    for t in 0..days {
        let day = enrolled + Days::new(t as u64);
        let tf = t as f64;
        let e = engagement(tf);
        let weekday = day.weekday();
        true_weight.push(w);

        let mut session_today = None;
        if let Some(k) = next_session
            && scenario.sessions[k] == day
        {
            let attended = rng.chance(p_attend0 * (0.4 + 0.6 * e));
            sessions.push(SessionRow {
                date: day,
                number: k + 1,
                attended,
            });
            session_today = Some(attended);
            next_session = (k + 1 < scenario.sessions.len()).then_some(k + 1);
        }

        // Morning weight: true weight, a weekly rhythm (highest Sunday/Monday, peak-to-trough
        // about 0.35 % of body weight; Orsama et al. 2014, Obes Facts 7:36) and scatter.
        let dow = weekday.num_days_from_monday() as f64;
        let weekly = 0.5 * 0.0035 * w * (std::f64::consts::TAU * (dow + 0.5) / 7.0).cos();
        let p_today = if daily {
            p_weigh * e.max(0.7)
        } else {
            p_weigh * e
        };
        if t == 0 || rng.chance(p_today) {
            let jitter = rng.int(-25, 25);
            weights.push(WeighRow {
                date: day,
                minute: (morning as i64 + jitter) as u32,
                kg: w + weekly + rng.gauss(0.0, sigma),
                clinic: false,
                mark: WeighMark::Clean,
            });
        }
        if session_today == Some(true) {
            // Midday, clothed, after breakfast: a clinic reading runs a little heavier.
            weights.push(WeighRow {
                date: day,
                minute: 12 * 60 + 30,
                kg: w + weekly + 0.6 + rng.gauss(0.0, sigma),
                clinic: true,
                mark: WeighMark::Clean,
            });
        }

        // Activity and its net energy cost, (MET − 1) × kg × hours (1 MET ≈ 1 kcal/kg/h;
        // Ainsworth et al. 2011, Med Sci Sports Exerc 43:1575).
        let mut activity_kcal = 0.0;
        if !no_activity && rng.chance(act_rate * e) {
            if rng.chance(0.03) {
                let (label, met) = *rng.pick(&CUSTOM_ACTIVITIES);
                let minutes = rng.int(6, 18) * 5;
                activity_kcal = (met - 1.0) * w * minutes as f64 / 60.0;
                activity.push(ActivityRow {
                    date: day,
                    activity: label,
                    minutes,
                    met: Some(met),
                    steps: None,
                });
            } else {
                let kind = ACTIVITIES[*rng.pick(&favourites)];
                let (lo, hi) = kind.minutes;
                let minutes = if hi <= 20 {
                    rng.int(lo, hi)
                } else {
                    rng.int(lo / 5, hi / 5) * 5
                };
                activity_kcal = (kind.met - 1.0) * w * minutes as f64 / 60.0;
                let steps = (kind.walking && step_counter).then(|| {
                    (minutes as f64 * rng.uniform(95.0, 120.0) / 10.0).round() as i64 * 10
                });
                activity.push(ActivityRow {
                    date: day,
                    activity: kind.code,
                    minutes,
                    met: None,
                    steps,
                });
            }
        }

        // True intake and the day's energy balance.
        let weekend = matches!(weekday, Weekday::Sat | Weekday::Sun);
        let eaten = maintenance0 - deficit * adherence(tf)
            + if weekend { weekend_extra } else { 0.0 }
            + rng.gauss(0.0, 180.0);
        let expended = rmr(w) * pal + activity_kcal;
        w += (eaten - expended) / rho;

        // What gets logged: fewer days as the months pass, and less than was eaten.
        let p_log = p_log0 * (log_floor + (1.0 - log_floor) * (-tf / log_tau).exp());
        if !no_log && rng.chance(p_log) {
            let total = eaten * (1.0 - under) * (1.0 + rng.gauss(0.0, 0.07));
            let parts = if meals { rng.int(2, 4) as usize } else { 1 };
            push_meals(
                &mut intake,
                &mut rng,
                day,
                total,
                parts,
                (carb_share, fat_share, sugar_share),
            );
        }
    }

    // --- labs ------------------------------------------------------------------------------
    let change_percent = 100.0 * (w - w0) / w0;
    let labs = simulate_labs(plan, &mut rng, enrolled, withdrew.is_none(), change_percent);

    let mut sim = Simulated {
        plan: plan.clone(),
        team,
        birth_date,
        age,
        height,
        enrolled,
        withdrew,
        body_fat_percent,
        unit_lb,
        time_column,
        weights,
        intake,
        activity,
        sessions,
        labs,
        true_weight,
    };
    for &d in &plan.defects {
        plant(&mut sim, d);
    }
    sim
}

/// Splits a day's logged energy into `parts` rows with distinct kcal values (two identical rows
/// on one day would look like the planted duplicate).
fn push_meals(
    out: &mut Vec<IntakeRow>,
    rng: &mut Rng,
    day: NaiveDate,
    total: f64,
    parts: usize,
    (carb, fat, sugar): (f64, f64, f64),
) {
    let weights: Vec<f64> = (0..parts).map(|_| rng.uniform(0.6, 1.4)).collect();
    let sum: f64 = weights.iter().sum();
    let first = out.len();
    for wt in weights {
        let mut kcal = (total * wt / sum).round().max(50.0) as i64;
        while out[first..].iter().any(|r| r.kcal == kcal) {
            kcal += 1;
        }
        let k = kcal as f64;
        // Atwater general factors 4/9/4 kcal per g (carbohydrate/fat/protein; FAO 2003, *Food
        // energy – methods of analysis and conversion factors*; from memory).
        out.push(IntakeRow {
            date: day,
            kcal,
            carbs_g: (k * carb / 4.0).round() as i64,
            fat_g: (k * fat / 9.0).round() as i64,
            protein_g: (k * (1.0 - carb - fat) / 4.0).round() as i64,
            free_sugars_g: (k * sugar / 4.0).round() as i64,
        });
    }
}

/// Baseline and (for completers) month-6 HbA1c and fasting glucose.
fn simulate_labs(
    plan: &Plan,
    rng: &mut Rng,
    enrolled: NaiveDate,
    completed: bool,
    change_percent: f64,
) -> Vec<LabRow> {
    // Ranges follow the ADA Standards of Care (Diabetes Care 2025;48 Suppl 1:S27): HbA1c
    // prediabetes 5.7–6.4 %, diabetes ≥ 6.5 %; fasting glucose 100–125 / ≥ 126 mg/dL.
    let (a1c, fpg) = match plan.glycaemia {
        Glycaemia::Normal => (rng.uniform(4.9, 5.6), rng.uniform(78.0, 99.0)),
        Glycaemia::Prediabetes => (rng.uniform(5.7, 6.4), rng.uniform(100.0, 124.0)),
        Glycaemia::Diabetes => (rng.uniform(6.6, 7.8), rng.uniform(128.0, 165.0)),
    };
    let a1c_ifcc = rng.chance(0.2);
    let glucose_mmol = rng.chance(0.45);
    let mut rows = Vec::with_capacity(4);
    let mut push = |date: NaiveDate, a1c: f64, fpg: f64| {
        rows.push(if a1c_ifcc {
            // NGSP–IFCC master equation: IFCC = 10.93 × NGSP − 23.50 (Hoelzel et al. 2004,
            // Clin Chem 50:166).
            LabRow {
                date,
                test: "hba1c",
                value: 10.93 * a1c - 23.50,
                unit: "mmol/mol",
                decimals: 0,
            }
        } else {
            LabRow {
                date,
                test: "hba1c",
                value: a1c,
                unit: "%",
                decimals: 1,
            }
        });
        rows.push(if glucose_mmol {
            // mg/dL ÷ 18.016 (glucose molar mass 180.16 g/mol, ÷ 10).
            LabRow {
                date,
                test: "fasting_glucose",
                value: fpg / 18.016,
                unit: "mmol/L",
                decimals: 1,
            }
        } else {
            LabRow {
                date,
                test: "fasting_glucose",
                value: fpg,
                unit: "mg/dL",
                decimals: 0,
            }
        });
    };
    push(enrolled + Days::new(rng.int(0, 10) as u64), a1c, fpg);
    if completed {
        // Illustrative only: glycaemia improves a little with loss and worsens with gain.
        let a1c6 = (a1c + 0.06 * change_percent + rng.gauss(0.0, 0.08)).max(4.6);
        let fpg6 = (fpg + 1.2 * change_percent + rng.gauss(0.0, 4.0)).max(70.0);
        push(
            date(2026, 9, 14) + Days::new(rng.int(0, 14) as u64),
            a1c6,
            fpg6,
        );
    }
    rows
}

/// Index of the home weigh-in nearest to `fraction` of the way through the records, skipping
/// rows already marked.
fn home_row_near(sim: &Simulated, fraction: f64) -> Option<usize> {
    let n = sim.weights.len();
    let target = (fraction * n as f64) as usize;
    (0..n)
        .flat_map(|d| [target.checked_add(d), target.checked_sub(d)])
        .flatten()
        .filter(|&i| i > 0 && i < n)
        .find(|&i| {
            let r = &sim.weights[i];
            !r.clinic && r.mark == WeighMark::Clean && r.date.year() == 2026
        })
}

/// Plants one defect into the simulated records.
fn plant(sim: &mut Simulated, defect: Defect) {
    let weigh = |sim: &mut Simulated, fraction: f64, mark: WeighMark| {
        if let Some(i) = home_row_near(sim, fraction) {
            sim.weights[i].mark = mark;
        }
    };
    match defect {
        Defect::LbInKgFile => weigh(sim, 0.4, WeighMark::LbInKg),
        Defect::DecimalComma => weigh(sim, 0.5, WeighMark::DecimalComma),
        Defect::ImpossibleWeight => weigh(sim, 0.6, WeighMark::Impossible),
        Defect::MissingField => weigh(sim, 0.3, WeighMark::MissingUnit),
        Defect::FutureDate => {
            if let Some(i) = home_row_near(sim, 0.7) {
                let d = sim.weights[i].date;
                sim.weights[i].date = d.with_year(d.year() + 1).expect("no 29 Feb in 2026");
            }
        }
        Defect::DuplicateIntake => {
            if !sim.intake.is_empty() {
                let i = sim.intake.len() / 2;
                let row = sim.intake[i];
                sim.intake.insert(i + 1, row);
            }
        }
        Defect::UnknownActivity => {
            let i = sim.activity.len() / 2;
            let day = sim
                .activity
                .get(i)
                .map_or(sim.enrolled + Days::new(30), |r| r.date);
            sim.activity.insert(
                i,
                ActivityRow {
                    date: day,
                    activity: UNKNOWN_ACTIVITY,
                    minutes: 30,
                    met: None,
                    steps: None,
                },
            );
        }
    }
}

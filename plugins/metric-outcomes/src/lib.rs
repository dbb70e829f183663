//! The built-in `outcomes` metric module of cohortpress.
//!
//! It answers "where does this participant stand?": weight change from baseline in kg, % and
//! BMI units with the WHO BMI class, the weight-change category, the 3/5/7/10 % milestones,
//! lab values with their categories, and the safety flags that a licensed clinician should
//! review (fast sustained loss, low logged intake, low BMI, lab values in the diabetes range,
//! and a medication review when someone on glucose-lowering medicine loses fast or eats little).
//!
//! # Where the numbers come from
//!
//! * **Baseline weight** is the first weigh-in on or after enrolment
//!   ([`ParticipantData::baseline_weight`]); when there are several weigh-ins on that day, their
//!   mean, moved by the steps in the weigh-ins that the trend found after it (its
//!   `weigh_in_steps` table: another scale, or a real jump of fluid or weight, which the trend's
//!   `weigh_in_step` flag puts before a clinician), so that the change since the start is
//!   counted on the trend's level. When the profile's flags hold `weigh-in-steps-real` (a
//!   clinician found the steps to be real changes: fluid, surgery), the baseline is not moved
//!   and the trend levels before each step are put back onto the weigh-ins' level, so the
//!   change, the milestones and the largest loss count the steps (the pace does not: it is the
//!   trend's). Only weigh-ins up to `period.to` are used.
//! * **Current weight** is the `trend` module's `current_weight_kg` (with its interval); without
//!   a trend output it is the mean of the weigh-ins on the last weigh-in day up to `period.to`.
//! * **Trend levels** (milestones, largest loss, fast-loss flag) come from the `trend` module's
//!   daily `weight_trend` series; without it, from the daily means of the raw weigh-ins.
//! * **Rate** is the trend's `slope_kg_per_week`; without it, the least-squares slope of the
//!   daily mean weigh-ins in the reporting period (common practice: from a fitted slope, never
//!   from two endpoint weights).
//!
//! Weight outcomes use every weigh-in up to `period.to`, including weigh-ins after a
//! withdrawal (a follow-up weight is still a weight).
//!
//! # Flags
//!
//! Severity `clinical` means "for review by a licensed clinician"; messages describe, never
//! diagnose.
//!
//! * `fast_loss` (clinical): over some span of `fast_loss_span_days` (21) consecutive days
//!   ending in the reporting period, the daily trend level fell faster than `fast_loss_kg_per_week` (1 kg/week;
//!   "about 1 kg (2 lb) a week sustained", NIH/NHLBI 1998, from memory). Days between trend
//!   points are filled by linear interpolation. The message names the most recent such span.
//! * `very_low_intake` (clinical): the mean of the logged intake days in the reporting period
//!   (on or after enrolment; at least [`MIN_INTAKE_DAYS`] days) is below `very_low_intake` (800
//!   kcal/d, VLCD, NIH/NHLBI 1998, from memory), on the food log alone.
//! * `low_intake` (clinical), when `very_low_intake` is not raised: intake below the
//!   sex-specific floor (1200 women / 1500 men kcal/d, common practice), by the same test as
//!   `below_resting_intake` (one function, `IntakeTest`), with the floor for resting energy and
//!   the reporting period's logged days. Raised when (a) the upper 95 % bound of the intake the
//!   weight trend implies (`energy` module) is below the floor, log or not; or (b) logged intake
//!   is below the floor on more than half of, or on average over, at least [`MIN_INTAKE_DAYS`] logged days and the
//!   trend does not clearly contradict it: the implied intake's *lower* 95 % bound is below the
//!   floor too; or (c) there is no implied intake to check the log against (no weigh-ins, or
//!   no energy module) and the log is below the floor as in (b), on the safe side. A log that
//!   the trend's whole interval puts above the floor is under-reporting (see
//!   `below_resting_intake`), not a low intake. The agreement asked of the trend is looser than
//!   for `below_resting_intake` (its lower bound, not its central value): the floor is a fixed
//!   line well above resting energy for most adults, where a log below it is less often mere
//!   under-reporting, and missing a low intake costs more than a review (program choice).
//! * `fast_gain` (clinical): the same test as `fast_loss` on a rise: faster than
//!   `fast_loss_kg_per_week` over `fast_loss_span_days` in a row, ending in the period (a change
//!   of scale or clothing, a mistyped weigh-in, or fluid, more often than tissue).
//! * `low_bmi` (clinical): current BMI below `underweight_bmi_below` (default 18.5 kg/m², the
//!   WHO underweight class; the report's guidance takes its underweight cut-off from here), or below
//!   `low_bmi_losing_below` (20 kg/m²) while the weight trend is still falling (the trend's
//!   status is `losing`, or its slope's whole 95 % interval is below zero). BMI 18.5–20 is the
//!   band the Malnutrition Universal Screening Tool already scores as a risk, and weight lost
//!   on top of it adds to the score (BAPEN 2003, MUST: BMI 18.5–20 scores 1, under 18.5 scores
//!   2, unplanned loss of 5–10 % in 3–6 months 1; checked against the tool's published score
//!   sheet); a report must not read as
//!   encouragement to go on losing there. From age 70 (at the period's end) the cut-off is
//!   `low_bmi_losing_below_70_plus` (22 kg/m²), the GLIM low-BMI criterion for older adults
//!   (Cederholm et al. 2019, Clin Nutr 38:1–9: low BMI under 20 below age 70, under 22 from
//!   70; checked against published summaries of the criteria. Some write the older band as
//!   "> 70", leaving 70 itself open; the cut-off applies from 70, the cautious reading).
//! * `lab_diabetes_range` (clinical) / `lab_prediabetes_range` (notice): judged on the latest
//!   value up to `period.to` of each test (fasting glucose, HbA1c).
//! * `lab_low_glucose` (clinical): the latest fasting glucose is below 70 mg/dL (3.9 mmol/L),
//!   ADA's level 1 hypoglycaemia (also a censored `< 3.0 mmol/L`).
//! * `lab_severe_bp` (clinical): the latest systolic blood pressure is above 180 mmHg or the
//!   latest diastolic above 120 mmHg, severe hypertension (the ACC/AHA 2017 guideline's
//!   "hypertensive crisis", Whelton et al. 2018, Hypertension 71:e13; from memory): a reading
//!   for a licensed clinician soon, and no time to start eating less or walking more on a
//!   report's suggestion (the report holds its suggestions). The table still shows blood
//!   pressure as `recorded`, with no class below that level.
//! * `lab_low_egfr` (clinical): the latest eGFR is below 60 mL/min/1.73 m² and not below 30,
//!   KDIGO 2012 categories G3a (45–59) and G3b (30–44) (KDIGO 2012 Clinical Practice Guideline
//!   for the Evaluation and Management of Chronic Kidney Disease, Kidney Int Suppl 3:1–150;
//!   from memory).
//!   For a licensed clinician; it does not hold the report's suggestions: the same guideline
//!   encourages a healthy weight and regular activity in chronic kidney disease (from memory),
//!   and a caution asks the person to talk to their clinician first. One value is not a
//!   diagnosis (chronic kidney disease needs a lasting reduction, over three months).
//! * `lab_very_low_egfr` (clinical): the latest eGFR is below 30 mL/min/1.73 m², KDIGO G4
//!   (15–29) or G5 (below 15), where the guideline refers to specialist kidney care (from
//!   memory) and eating is guided by it: it holds the report's suggestions.
//! * `medication_review` (clinical): the profile carries `glucose-lowering-medication` and
//!   `fast_loss`, `low_intake`, `very_low_intake`, `below_resting_intake` or `lab_low_glucose`
//!   was raised, or the `energy` module (when it
//!   runs before this one, as in the usual order) raised `very_low_implied_intake`: the weight
//!   trend implies an intake below a very-low-calorie diet's (risk of low blood sugar). A
//!   fasting glucose below 70 mg/dL is that risk measured.
//! * `below_resting_intake` (clinical): over the last [`BELOW_RESTING_WINDOW_DAYS`] (28) days
//!   of the period (from enrolment when that is later; at least [`BELOW_RESTING_MIN_DAYS`]), intake was below the person's resting energy expenditure (Mifflin–St Jeor
//!   at the current weight and age: Mifflin et al. 1990, Am J Clin Nutr 51:241), on the weight
//!   trend's evidence. Read from the `energy` module's intake implied by the weight trend (its
//!   95 % interval; the module runs before this one in the usual order, and without it the
//!   flag is never raised). Raised when either
//!   (a) the implied intake's *upper* 95 % bound is below resting energy: the trend alone
//!   shows it, food log or not; or
//!   (b) logged intake is below resting energy on more than half of, or on average over, at least
//!   [`BELOW_RESTING_MIN_LOGGED_DAYS`] logged days in the window *and* the implied intake's
//!   central value is below it too (the weight trend agrees with the log).
//!   Logged intake alone never raises it: food logs leave out 10–45 % of intake (Trabulsi &
//!   Schoeller 2001, Am J Physiol Endocrinol Metab 281:E891, from memory), and a logged
//!   intake below about 1.35 × resting energy is the usual sign of under-reporting rather than
//!   of what a weight-stable adult eats (the Goldberg cut-off: Goldberg et al. 1991, Eur J Clin
//!   Nutr 45:569; Black 2000, Int J Obes 24:1119; from memory), so a log below resting energy
//!   on its own would flag mostly people who log too little, not people who eat too little.
//!   When the energy module withheld the implied intake as below a very-low-calorie diet's, its
//!   own `very_low_implied_intake` flag stands for this one.
//! * `pregnancy` (clinical): the profile carries `pregnant`. Loss targets, the intake floors
//!   and the energy model are for adults who are not pregnant, so the report holds every
//!   suggestion and points to a clinician.
//! * `breastfeeding` (clinical): the profile carries `breastfeeding`. Milk takes energy the
//!   energy model does not count (a lactating woman's requirement is several hundred kcal a day
//!   above her non-lactating one: IOM 2005, Dietary Reference Intakes for Energy; from memory),
//!   and the intake floors are for adults who are not breastfeeding, so the report holds every
//!   suggestion and points to a clinician or midwife.
//! * `insufficient_data` (info): no weigh-in yet.
//!
//! # Cut points
//!
//! All categories use half-open intervals, so that every value falls in exactly one class
//! (24.99 → normal, 25.0 → overweight). Values within 1e-9 of a cut point count as on it; this
//! only absorbs floating-point round-off of unit conversions.
//!
//! The reports say "in the diabetes range", never "has diabetes": one result does not make a
//! diagnosis (ADA Standards of Care 2025, §2).

#![warn(missing_docs)]

use chrono::{Duration, NaiveDate};
use cohortpress_metric_api::units::{
    CM_PER_IN, GLUCOSE_MGDL_PER_MMOLL, Mass, hba1c_percent_to_mmolmol,
};
use cohortpress_metric_api::{
    Censor, FlagSeverity, LabResult, LabTest, MetricModule, ModuleContext, ModuleError,
    ModuleOutput, ModuleSpec, OutputSpec, ParticipantData, SettingKind, SettingSpec, Sex, Table,
};
use std::collections::BTreeMap;

/// Id of this module in `program.yaml`.
pub const MODULE_ID: &str = "outcomes";

pub mod view;

use cohortpress_metric_api::view::{ModuleView, TableRow};
use cohortpress_metric_energy::mifflin_st_jeor;
use cohortpress_metric_energy::view::EnergyView;
use cohortpress_metric_trend::view::{REAL_STEPS_FLAG, Status, TrendView, step_shift_after};
use view::{
    BmiCategory, CurrentWeightSource, LABS_LABEL, LabCategory, LabRow, MILESTONES_LABEL,
    MilestoneRow, OutcomesFlag, TRAJECTORY_LABEL, TrajectoryRow, WeightChangeCategory, names,
};

/// Id of the module whose outputs this one reads.
pub const TREND_MODULE: &str = "trend";

/// Weight-loss milestones, % of baseline weight.
pub const MILESTONES_PERCENT: [f64; 4] = [3.0, 5.0, 7.0, 10.0];

/// Fewest logged intake days in the period before the intake flags are considered (program
/// choice: fewer days say too little about usual intake to put before a clinician).
pub const MIN_INTAKE_DAYS: usize = 4;

/// The energy module's id and its flag for an implied intake below a very-low-calorie diet's
/// (read from its output when it ran before this module; this module does not require it).
const ENERGY_MODULE: &str = "energy";
const ENERGY_VERY_LOW_IMPLIED_INTAKE: &str = "very_low_implied_intake";

/// Days at the end of the period over which `below_resting_intake` is judged: four whole
/// weeks, the default `window_days` of the `energy` module, whose implied intake is the mean
/// over that window ("for weeks": program choice).
pub const BELOW_RESTING_WINDOW_DAYS: i64 = 28;
/// Fewest days in that window (after enrolment) for `below_resting_intake` to be judged at
/// all: two weeks, so that "for weeks" holds for someone who enrolled less than four weeks
/// before the period's end (program choice).
pub const BELOW_RESTING_MIN_DAYS: i64 = 14;
/// Fewest logged days in that window for the food log to count towards
/// `below_resting_intake` (two a week on average; program choice).
pub const BELOW_RESTING_MIN_LOGGED_DAYS: usize = 8;

/// Profile flag for people who take glucose-lowering medication.
pub const GLUCOSE_LOWERING_FLAG: &str = "glucose-lowering-medication";
/// Profile flag for a pregnancy.
pub const PREGNANCY_FLAG: &str = "pregnant";
/// Profile flag for breastfeeding.
pub const BREASTFEEDING_FLAG: &str = "breastfeeding";
/// Default of `underweight_bmi_below`, kg/m²: below it `low_bmi` is raised whatever the trend
/// (WHO 2000, Technical Report Series 894: underweight is BMI < 18.5).
pub const UNDERWEIGHT_BMI_BELOW: f64 = 18.5;
/// Default of `low_bmi_losing_below`, kg/m²: below it a weight trend that is still falling
/// raises `low_bmi` (BMI 18.5–20 scores a malnutrition risk: MUST, BAPEN 2003).
pub const LOW_BMI_LOSING_BELOW: f64 = 20.0;
/// Default of `low_bmi_losing_below_70_plus`, kg/m²: the same test for people aged 70 or over,
/// whose BMI counts as low below 22 (GLIM criteria: low BMI < 20 kg/m² under 70 years, < 22 at
/// 70 and over; Cederholm et al. 2019, Clin Nutr 38:1–9, see the module notes).
pub const LOW_BMI_LOSING_BELOW_70_PLUS: f64 = 22.0;
/// Age from which `low_bmi_losing_below_70_plus` applies, whole completed years
/// (`Profile::whole_years_on`; GLIM 2019, as above).
pub const OLDER_ADULT_AGE: f64 = 70.0;

/// Round-off allowance at cut points (see the crate docs).
const CUT_EPS: f64 = 1e-9;

fn at_least(x: f64, cut: f64) -> bool {
    x >= cut - CUT_EPS
}

/// Whether `x` is at or above the cut point `cut` by this module's rule for cut points: a
/// value within round-off of a cut counts as on it (see "Cut points" in the crate docs). The
/// report's advice decides with it too, so that a BMI this module classes as 25.0
/// ("pre-obese") is never "below 25" there: 64.0 kg at 160 cm is 24.999999999999996 in binary.
///
/// # Examples
///
/// ```
/// use cohortpress_metric_outcomes::{at_or_above_cut, bmi};
/// assert!(at_or_above_cut(bmi(64.0, 1.6), 25.0));
/// assert!(!at_or_above_cut(24.99, 25.0));
/// ```
pub fn at_or_above_cut(x: f64, cut: f64) -> bool {
    at_least(x, cut)
}

/// A BMI to one decimal as reports print it: rounded, except where rounding would cross a WHO
/// cut-off that its class ([`who_bmi_class`]) does not; it is then cut instead (29.97 is
/// "pre-obese" and prints 29.9, not 30.0; 18.46 is underweight and prints 18.4, not 18.5; 18.69
/// prints 18.7). The WHO ranges are written to one decimal the same way ("25 to 29.9").
pub fn bmi_one_decimal(bmi: f64) -> f64 {
    let rounded = (bmi * 10.0).round() / 10.0;
    if who_bmi_class(rounded) == who_bmi_class(bmi) {
        rounded
    } else {
        ((bmi + CUT_EPS) * 10.0).floor() / 10.0
    }
}

/// A glucose or HbA1c value as the reports print it, in `unit` (`%`, `mmol/mol`, `mmol/L` or
/// `mg/dL`) to `decimals` places, rounded unless rounding would carry it across the ADA cut-off
/// that sets its category; it is then cut towards its own side instead. 47 mmol/mol is 6.45 %
/// NGSP, in the prediabetes range, and rounds to "6.5 %", the diabetes cut-off: a report read
/// "The most recent HbA1c (6.5 %, …) is in the prediabetes range" (demo, 150, SG-134 with its
/// September result). It prints 6.4 %; 6.46 % prints 6.4, 6.5 % stays 6.5. Other tests and
/// units are rounded as they are.
pub fn lab_shown(test: LabTest, value: f64, unit: &str, decimals: i32) -> f64 {
    let class = |v: f64| -> Option<LabCategory> {
        match (test, unit) {
            (LabTest::Hba1c, "%") => Some(hba1c_class(v)),
            // Classed by the exact inverse of the conversion that made the value shown
            // (`hba1c_percent_to_mmolmol`, linear): the master equation's other direction
            // (`hba1c_mmolmol_to_percent`, Hoelzel et al. 2004) is not its exact inverse, and
            // 6.499 % → 47.53 mmol/mol → 6.5004 % printed "48 mmol/mol" beside "prediabetes
            // range" (ADA Standards of Care 2025 §2: diabetes from 6.5 %, 48 mmol/mol).
            (LabTest::Hba1c, "mmol/mol") => {
                let at0 = hba1c_percent_to_mmolmol(0.0);
                let per_percent = hba1c_percent_to_mmolmol(1.0) - at0;
                Some(hba1c_class((v - at0) / per_percent))
            }
            (LabTest::FastingGlucose, "mmol/L") => Some(fasting_glucose_class(v)),
            // 59.6 is G3a, below 60: printed "59", not "60" beside "below 60".
            (LabTest::Egfr, _) => Some(egfr_class(v)),
            (LabTest::FastingGlucose, "mg/dL") => {
                Some(fasting_glucose_class(v / GLUCOSE_MGDL_PER_MMOLL))
            }
            _ => None,
        }
    };
    let f = 10f64.powi(decimals);
    let rounded = (value * f).round() / f;
    if class(rounded) == class(value) {
        rounded
    } else if rounded > value {
        (value * f).floor() / f
    } else {
        (value * f).ceil() / f
    }
}

/// Weight outcomes, milestones, lab categories and clinician-review flags.
#[derive(Debug, Clone, Copy, Default)]
pub struct OutcomesModule;

/// Body-mass index, kg/m².
///
/// # Formula
///
/// BMI = weight (kg) / height (m)² (WHO TRS 894, 2000).
///
/// # Examples
///
/// ```
/// let b = cohortpress_metric_outcomes::bmi(72.0, 1.70);
/// assert!((b - 24.913).abs() < 0.001);
/// ```
pub fn bmi(kg: f64, m: f64) -> f64 {
    kg / (m * m)
}

/// WHO adult BMI class of `bmi` (kg/m²) as `(code, label)`.
///
/// # Formula
///
/// Half-open intervals (WHO TRS 894, 2000): underweight < 18.5 ≤ normal < 25 ≤ overweight
/// (pre-obese) < 30 ≤ obesity class I < 35 ≤ class II < 40 ≤ class III.
///
/// # Examples
///
/// ```
/// use cohortpress_metric_outcomes::who_bmi_category;
/// assert_eq!(who_bmi_category(24.99).0, "normal");
/// assert_eq!(who_bmi_category(25.0).0, "overweight");
/// ```
pub fn who_bmi_category(bmi: f64) -> (&'static str, &'static str) {
    let c = who_bmi_class(bmi);
    (c.as_str(), c.label())
}

/// WHO adult BMI class of `bmi` (kg/m²); see [`who_bmi_category`].
pub fn who_bmi_class(bmi: f64) -> BmiCategory {
    if at_least(bmi, 40.0) {
        BmiCategory::ObesityClass3
    } else if at_least(bmi, 35.0) {
        BmiCategory::ObesityClass2
    } else if at_least(bmi, 30.0) {
        BmiCategory::ObesityClass1
    } else if at_least(bmi, 25.0) {
        BmiCategory::Overweight
    } else if at_least(bmi, 18.5) {
        BmiCategory::Normal
    } else {
        BmiCategory::Underweight
    }
}

/// Glycaemia category of an HbA1c value in % (NGSP): `normal`, `prediabetes_range` or
/// `diabetes_range`.
///
/// # Formula
///
/// < 5.7 % normal; 5.7 to < 6.5 % prediabetes range; ≥ 6.5 % diabetes range (ADA Standards of
/// Care in Diabetes 2025, §2, Diabetes Care 48 Suppl 1:S27). A value given in mmol/mol is
/// converted first, so 48 mmol/mol (6.54 %) is in the diabetes range and 47 (6.45 %) is not.
///
/// # Examples
///
/// ```
/// use cohortpress_metric_outcomes::hba1c_category;
/// assert_eq!(hba1c_category(6.4), "prediabetes_range");
/// assert_eq!(hba1c_category(6.5), "diabetes_range");
/// ```
pub fn hba1c_category(percent: f64) -> &'static str {
    hba1c_class(percent).as_str()
}

fn hba1c_class(percent: f64) -> LabCategory {
    if at_least(percent, 6.5) {
        LabCategory::DiabetesRange
    } else if at_least(percent, 5.7) {
        LabCategory::PrediabetesRange
    } else {
        LabCategory::Normal
    }
}

/// Glycaemia category of a fasting plasma glucose in mmol/L: `below_normal_range`, `normal`,
/// `prediabetes_range` or `diabetes_range`.
///
/// # Formula
///
/// The value is converted to mg/dL (× 18.016) and compared with ADA's mg/dL cut points:
/// < 70 below the normal range (level 1 hypoglycaemia, [`LOW_GLUCOSE_MG_DL`]); 70–99 normal;
/// 100–125 prediabetes range (impaired fasting glucose); ≥ 126 diabetes range (ADA Standards of
/// Care in Diabetes 2025, §2).
///
/// # Remarks
///
/// ADA prints the same cut points as 5.6 and 7.0 mmol/L, which are rounded: 5.6 mmol/L is
/// 100.9 mg/dL and 7.0 mmol/L is 126.1 mg/dL, so both land in the category ADA gives them under
/// this rule, and so do 100 and 126 mg/dL converted to mmol/L and back. The two printed tables
/// disagree only for values with two or more decimals in mmol/L between 5.551 and 5.599 or
/// between 6.994 and 6.999; there the mg/dL cut point decides, which gives the higher category
/// (the more cautious reading for a result that a clinician will review).
///
/// # Examples
///
/// ```
/// use cohortpress_metric_outcomes::fasting_glucose_category;
/// assert_eq!(fasting_glucose_category(6.9), "prediabetes_range");
/// assert_eq!(fasting_glucose_category(7.0), "diabetes_range");
/// assert_eq!(fasting_glucose_category(3.9), "normal"); // 70.3 mg/dL
/// assert_eq!(fasting_glucose_category(3.8), "below_normal_range");
/// ```
pub fn fasting_glucose_category(mmol_l: f64) -> &'static str {
    fasting_glucose_class(mmol_l).as_str()
}

fn fasting_glucose_class(mmol_l: f64) -> LabCategory {
    let mg_dl = mmol_l * GLUCOSE_MGDL_PER_MMOLL;
    if at_least(mg_dl, 126.0) {
        LabCategory::DiabetesRange
    } else if at_least(mg_dl, 100.0) {
        LabCategory::PrediabetesRange
    } else if at_least(mg_dl, LOW_GLUCOSE_MG_DL) {
        LabCategory::Normal
    } else {
        LabCategory::BelowNormalRange
    }
}

/// Fasting plasma glucose below which a result is low blood sugar: 70 mg/dL (3.9 mmol/L), ADA's
/// level 1 hypoglycaemia (ADA Standards of Care in Diabetes 2025, §6, "Hypoglycemia"; from
/// memory). A fasting value this low in someone losing weight on a reduced intake (or taking a
/// glucose-lowering drug) is for a licensed clinician, not "normal".
pub const LOW_GLUCOSE_MG_DL: f64 = 70.0;

/// Systolic and diastolic blood pressure above which a reading is severe hypertension, mmHg:
/// the ACC/AHA 2017 guideline's "hypertensive crisis", above 180 and/or above 120 (Whelton et
/// al. 2018, Hypertension 71:e13; from memory).
pub const SEVERE_BP_MMHG: (f64, f64) = (180.0, 120.0);

/// eGFR below which a result is for a licensed clinician, mL/min/1.73 m²: the lower bound of
/// KDIGO 2012's G2, so G3a–G5 (KDIGO 2012 CKD guideline, Kidney Int Suppl 3:1–150; from
/// memory).
pub const LOW_EGFR: f64 = 60.0;
/// eGFR below which a result holds the report's suggestions, mL/min/1.73 m²: KDIGO G4–G5,
/// where the guideline refers to specialist kidney care (same source; from memory).
pub const VERY_LOW_EGFR: f64 = 30.0;

/// KDIGO 2012 GFR category of an eGFR (mL/min/1.73 m²): G1 ≥ 90, G2 60–89, G3a 45–59,
/// G3b 30–44, G4 15–29, G5 < 15 (half-open, as every class here).
fn egfr_class(v: f64) -> LabCategory {
    if at_least(v, 90.0) {
        LabCategory::EgfrG1
    } else if at_least(v, LOW_EGFR) {
        LabCategory::EgfrG2
    } else if at_least(v, 45.0) {
        LabCategory::EgfrG3a
    } else if at_least(v, VERY_LOW_EGFR) {
        LabCategory::EgfrG3b
    } else if at_least(v, 15.0) {
        LabCategory::EgfrG4
    } else {
        LabCategory::EgfrG5
    }
}

/// Waist-circumference risk category (Europid cut points): `not_increased_risk`,
/// `increased_risk` or `substantially_increased_risk`.
///
/// # Formula
///
/// Men: > 94 cm increased, > 102 cm substantially increased; women: > 80 cm and > 88 cm
/// (WHO expert consultation on waist circumference, 2008, published 2011; from memory).
pub fn waist_category(cm: f64, sex: Sex) -> &'static str {
    waist_class(cm, sex).as_str()
}

fn waist_class(cm: f64, sex: Sex) -> LabCategory {
    let (increased, substantially) = match sex {
        Sex::Male => (94.0, 102.0),
        Sex::Female => (80.0, 88.0),
    };
    if cm > substantially + CUT_EPS {
        LabCategory::SubstantiallyIncreasedRisk
    } else if cm > increased + CUT_EPS {
        LabCategory::IncreasedRisk
    } else {
        LabCategory::NotIncreasedRisk
    }
}

/// Estimated average glucose (mg/dL) from HbA1c (%).
///
/// # Formula
///
/// eAG = 28.7 × A1C − 46.7 (ADAG study: Nathan et al. 2008, Diabetes Care 31:1473).
///
/// # Examples
///
/// ```
/// let e = cohortpress_metric_outcomes::eag_mg_dl(7.0);
/// assert!((e - 154.2).abs() < 1e-9);
/// ```
pub fn eag_mg_dl(a1c_percent: f64) -> f64 {
    28.7 * a1c_percent - 46.7
}

/// Weight-change category of a change in % of baseline (negative = loss), as `(code, label)`.
///
/// # Formula
///
/// gain ≥ 3 % → `gain_3_or_more`; −3 % < change < +3 % → `stable` (Stevens et al. 2006,
/// Int J Obes 30:391); loss 3 to < 5 % → `loss_3_to_5`; 5 to < 7 % → `loss_5_to_7`;
/// 7 to < 10 % → `loss_7_to_10`; ≥ 10 % → `loss_10_or_more`.
///
/// # Examples
///
/// ```
/// use cohortpress_metric_outcomes::weight_change_category;
/// assert_eq!(weight_change_category(-2.9).0, "stable");
/// assert_eq!(weight_change_category(-5.0).0, "loss_5_to_7");
/// ```
pub fn weight_change_category(percent: f64) -> (&'static str, &'static str) {
    let c = weight_change_class(percent);
    (c.as_str(), c.label())
}

/// Weight-change category of a change in % of baseline; see [`weight_change_category`].
pub fn weight_change_class(percent: f64) -> WeightChangeCategory {
    let loss = -percent;
    if at_least(percent, 3.0) {
        WeightChangeCategory::Gain3OrMore
    } else if at_least(loss, 10.0) {
        WeightChangeCategory::Loss10OrMore
    } else if at_least(loss, 7.0) {
        WeightChangeCategory::Loss7To10
    } else if at_least(loss, 5.0) {
        WeightChangeCategory::Loss5To7
    } else if at_least(loss, 3.0) {
        WeightChangeCategory::Loss3To5
    } else {
        WeightChangeCategory::Stable
    }
}

fn test_words(t: LabTest) -> &'static str {
    match t {
        LabTest::FastingGlucose => "fasting glucose",
        LabTest::Hba1c => "HbA1c",
        LabTest::Waist => "waist circumference",
        LabTest::SystolicBp => "systolic blood pressure",
        LabTest::DiastolicBp => "diastolic blood pressure",
        LabTest::Egfr => "eGFR (estimated kidney function)",
    }
}

/// Category code of one lab result.
/// A waist without a recorded sex has no class: the cut-offs are sex-specific, and either pair
/// would mislabel half of the people.
///
/// A censored value (`>14.0`: only a bound is known) has the category every value beyond its
/// bound has, when they all have the same: HbA1c `>14.0 %` is in the diabetes range whatever
/// the value, `<5.0 %` in the normal range; `>6.0 %` may be either side of 6.5 % and is only
/// `recorded` (no category, no flag).
fn lab_category(lab: &LabResult, sex: Option<Sex>) -> LabCategory {
    let class = |v: f64| match lab.test {
        LabTest::FastingGlucose => fasting_glucose_class(v),
        LabTest::Hba1c => hba1c_class(v),
        LabTest::Waist => sex.map_or(LabCategory::Recorded, |sex| waist_class(v, sex)),
        LabTest::SystolicBp | LabTest::DiastolicBp => LabCategory::Recorded,
        LabTest::Egfr => egfr_class(v),
    };
    // The nearest and the farthest values the bound allows (a strict bound excludes itself:
    // `>102` cm is above the 102 cm cut, `<5.7` % below 5.7).
    let (near, far) = match lab.censored {
        None => return class(lab.value),
        Some(Censor::Above) => (lab.value + 2.0 * CUT_EPS, f64::MAX),
        Some(Censor::AtLeast) => (lab.value, f64::MAX),
        Some(Censor::Below) => (lab.value - 2.0 * CUT_EPS, 0.0),
        Some(Censor::AtMost) => (lab.value, 0.0),
    };
    let c = class(near);
    if c == class(far) {
        c
    } else {
        LabCategory::Recorded
    }
}

/// The value in the other unit people use: (value, unit).
fn lab_alt(lab: &LabResult) -> Option<(f64, &'static str)> {
    match lab.test {
        LabTest::FastingGlucose => Some((lab.value * GLUCOSE_MGDL_PER_MMOLL, "mg/dL")),
        LabTest::Hba1c => Some((hba1c_percent_to_mmolmol(lab.value), "mmol/mol")),
        LabTest::Waist => Some((lab.value / CM_PER_IN, "in")),
        LabTest::SystolicBp | LabTest::DiastolicBp | LabTest::Egfr => None,
    }
}

/// Daily mean of the weigh-ins from `from` to `to`, by day.
fn daily_means(data: &ParticipantData, from: NaiveDate, to: NaiveDate) -> Vec<(NaiveDate, f64)> {
    let mut days: BTreeMap<NaiveDate, (f64, usize)> = BTreeMap::new();
    for w in data
        .weights
        .iter()
        .filter(|w| w.date >= from && w.date <= to)
    {
        let e = days.entry(w.date).or_insert((0.0, 0));
        e.0 += w.weight.kg();
        e.1 += 1;
    }
    days.into_iter()
        .map(|(d, (sum, n))| (d, sum / n as f64))
        .collect()
}

/// A complete daily series from dated levels, filling missing days by linear interpolation.
fn fill_daily(levels: &[(NaiveDate, f64)]) -> Vec<(NaiveDate, f64)> {
    let mut out = Vec::new();
    for pair in levels.windows(2) {
        let ((d0, v0), (d1, v1)) = (pair[0], pair[1]);
        let n = (d1 - d0).num_days();
        for k in 0..n {
            out.push((d0 + Duration::days(k), v0 + (v1 - v0) * k as f64 / n as f64));
        }
    }
    if let Some(&last) = levels.last() {
        out.push(last);
    }
    out
}

/// Least-squares slope of `points` in kg per week, `None` with fewer than two distinct days.
fn ols_slope_per_week(points: &[(NaiveDate, f64)]) -> Option<f64> {
    if points.len() < 2 {
        return None;
    }
    let t0 = points[0].0;
    let xs: Vec<f64> = points
        .iter()
        .map(|(d, _)| (*d - t0).num_days() as f64)
        .collect();
    let n = points.len() as f64;
    let mx = xs.iter().sum::<f64>() / n;
    let my = points.iter().map(|p| p.1).sum::<f64>() / n;
    let sxx: f64 = xs.iter().map(|x| (x - mx).powi(2)).sum();
    let sxy: f64 = xs
        .iter()
        .zip(points)
        .map(|(x, p)| (x - mx) * (p.1 - my))
        .sum();
    (sxx > 0.0).then(|| 7.0 * sxy / sxx)
}

/// The fastest and the latest span of `span` days over which the daily level fell faster
/// than `limit` kg/week, and the start of the run of such spans, day after day, that the latest
/// ends: `(fastest rate, latest (start, end, rate), run start)`.
fn fast_loss_spans(
    daily: &[(NaiveDate, f64)],
    span: usize,
    limit: f64,
) -> Option<(f64, (NaiveDate, NaiveDate, f64), NaiveDate)> {
    let weeks = span as f64 / 7.0;
    let mut fastest = f64::NEG_INFINITY;
    let mut latest = None;
    let mut run_start = None;
    let mut latest_run_start = None;
    for i in span..daily.len() {
        let (d0, v0) = daily[i - span];
        let (d1, v1) = daily[i];
        let rate = (v0 - v1) / weeks;
        if rate > limit + CUT_EPS {
            fastest = fastest.max(rate);
            latest = Some((d0, d1, rate));
            let start = *run_start.get_or_insert(d0);
            latest_run_start = Some(start);
        } else {
            run_start = None;
        }
    }
    latest.map(|l| (fastest, l, latest_run_start.unwrap_or(l.0)))
}

fn kg_lb(kg: f64) -> String {
    kg_lb_to(kg, 1)
}

fn kg_lb_to(kg: f64, decimals: usize) -> String {
    format!(
        "{kg:.decimals$} kg ({:.decimals$} lb)",
        Mass::from_kg(kg).lb()
    )
}

/// A rate above the fast-change `limit`, printed beside it: to one decimal, or to as many as it
/// takes (up to three) for it not to print as the limit itself. "faster than 1.0 kg (2.2 lb) a
/// week … about 1.0 kg (2.2 lb) a week" was the flag of 1.01 kg a week: the rule is "faster
/// than" (`rate > limit`, exactly 1 kg a week is not flagged), and the words now show it
/// (`1.01 kg (2.23 lb)`). Closer than that it is "just over" the limit.
fn rate_beside_limit(rate: f64, limit: f64) -> String {
    (1..=3)
        .map(|d| (kg_lb_to(rate, d), kg_lb_to(limit, d)))
        .find(|(r, l)| r != l)
        .map_or_else(
            || format!("just over {}", kg_lb(limit)),
            |(r, _)| format!("about {r}"),
        )
}

impl MetricModule for OutcomesModule {
    fn spec(&self) -> ModuleSpec {
        ModuleSpec {
            id: MODULE_ID.into(),
            version: env!("CARGO_PKG_VERSION").into(),
            description: "Weight outcomes from baseline (first weigh-in on or after enrolment) to \
                the current trend weight: change in kg, % and BMI, WHO BMI class, weight-change \
                category (stable within 3 %, Stevens et al. 2006), the 3/5/7/10 % milestones, lab \
                values in both common units with their categories (ADA Standards of Care 2025 §2 \
                for glucose and HbA1c, HbA1c NGSP/IFCC master equation, ADAG estimated average \
                glucose, WHO 2008 waist cut points), and flags for clinician review: sustained \
                fast loss, low or very low logged intake, BMI under 18.5 (or under 20 while \
                still losing), lab values in the \
                prediabetes or diabetes range, and a medication review for people taking \
                glucose-lowering medicine."
                .into(),
            settings: vec![
                SettingSpec::number(
                    "intake_floor_female",
                    1200.0,
                    "kcal/d",
                    0.0,
                    5000.0,
                    "mean logged intake below which a woman's intake is flagged as low \
                     (common practice)",
                ),
                SettingSpec::number(
                    "intake_floor_male",
                    1500.0,
                    "kcal/d",
                    0.0,
                    5000.0,
                    "mean logged intake below which a man's intake is flagged as low \
                     (common practice)",
                ),
                SettingSpec::number(
                    "very_low_intake",
                    800.0,
                    "kcal/d",
                    0.0,
                    5000.0,
                    "mean logged intake below which intake is flagged as very low (VLCD, \
                     NIH/NHLBI 1998)",
                ),
                SettingSpec::number(
                    "fast_loss_kg_per_week",
                    1.0,
                    "kg/wk",
                    0.1,
                    5.0,
                    "trend loss rate above which sustained loss is flagged (NIH/NHLBI 1998)",
                ),
                SettingSpec::number(
                    "underweight_bmi_below",
                    UNDERWEIGHT_BMI_BELOW,
                    "kg/m²",
                    15.0,
                    25.0,
                    "BMI below which the weight is flagged for a clinician whatever the trend, \
                     and further loss is not advised (WHO 2000: underweight < 18.5)",
                ),
                SettingSpec::number(
                    "low_bmi_losing_below",
                    LOW_BMI_LOSING_BELOW,
                    "kg/m²",
                    18.5,
                    25.0,
                    "BMI below which a weight trend that is still falling is flagged for a \
                     clinician (MUST, BAPEN 2003: BMI 18.5–20 scores a malnutrition risk)",
                ),
                SettingSpec::number(
                    "low_bmi_losing_below_70_plus",
                    LOW_BMI_LOSING_BELOW_70_PLUS,
                    "kg/m²",
                    18.5,
                    30.0,
                    "the same for people aged 70 or over at the period's end (GLIM 2019: \
                     low BMI < 22 kg/m² at 70 and over)",
                ),
                SettingSpec {
                    name: "fast_loss_span_days".into(),
                    kind: SettingKind::Integer,
                    default: serde_json::json!(21),
                    unit: "d".into(),
                    choices: vec![],
                    min: Some(7.0),
                    max: Some(182.0),
                    description: "length of the span over which fast loss must be sustained".into(),
                },
            ],
            outputs: vec![
                OutputSpec::new(
                    names::BASELINE_WEIGHT_KG,
                    "scalar",
                    "kg",
                    "first weigh-in day on or after enrolment",
                ),
                OutputSpec::new(
                    names::CURRENT_WEIGHT_KG,
                    "scalar",
                    "kg",
                    "trend weight at the last weigh-in in the period (without a trend: that day's weigh-ins; see current_weight_source)",
                ),
                OutputSpec::new(names::CHANGE_KG, "scalar", "kg", "current − baseline"),
                OutputSpec::new(
                    names::CHANGE_PERCENT,
                    "scalar",
                    "%",
                    "100·(current − baseline)/baseline; negative = loss",
                ),
                OutputSpec::new(
                    names::BMI_BASELINE_KG_M2,
                    "scalar",
                    "kg/m2",
                    "BMI at baseline",
                ),
                OutputSpec::new(names::BMI_CURRENT_KG_M2, "scalar", "kg/m2", "BMI now"),
                OutputSpec::new(names::BMI_CHANGE_KG_M2, "scalar", "kg/m2", "BMI change"),
                OutputSpec::new(names::RATE_KG_PER_WEEK, "scalar", "kg/wk", "trend slope"),
                OutputSpec::new(
                    names::MAX_LOSS_PERCENT,
                    "scalar",
                    "%",
                    "largest loss on the trend so far (positive = loss)",
                ),
                OutputSpec::new(
                    names::BMI_CATEGORY_BASELINE,
                    "text",
                    "",
                    &format!("WHO BMI class at baseline: {}", codes::<BmiCategory>()),
                )
                .coded::<BmiCategory>(),
                OutputSpec::new(
                    names::BMI_CATEGORY_CURRENT,
                    "text",
                    "",
                    &format!("WHO BMI class now: {}", codes::<BmiCategory>()),
                )
                .coded::<BmiCategory>(),
                OutputSpec::new(
                    names::WEIGHT_CHANGE_CATEGORY,
                    "text",
                    "",
                    &format!(
                        "weight-change category, % of baseline: {}",
                        codes::<WeightChangeCategory>()
                    ),
                )
                .coded::<WeightChangeCategory>(),
                OutputSpec::new(
                    names::CURRENT_WEIGHT_SOURCE,
                    "text",
                    "",
                    "`trend` or `weigh_ins`",
                )
                .coded::<CurrentWeightSource>(),
                OutputSpec::new(
                    names::MILESTONES,
                    "table",
                    "",
                    "3/5/7/10 % milestones and the day each was reached",
                ),
                OutputSpec::new(
                    names::LABS,
                    "table",
                    "",
                    "lab values in both units with categories; qualifier (`>`, `>=`, `<`, \
                     `<=`) is set when the laboratory reported only a bound (a censored value \
                     such as `>14.0`): value and value_alt are then that bound, not a \
                     measurement, eag_mg_dl is empty, and category is the one every value \
                     beyond the bound has, or `recorded` when the bound leaves it open",
                ),
                OutputSpec::new(
                    names::TRAJECTORY,
                    "table",
                    "",
                    "change from the starting weight by week since enrolment: week (0 = the \
                     enrolment week, days 0–6), date (the week's last day, enrolment + 7·week + \
                     6 days, up to the period's end), weight_kg (the trend weight that day, kg) \
                     and change_percent (100·(weight − baseline)/baseline, negative = loss); \
                     weeks without a trend weight on their last day have no row. The group \
                     report's weekly trajectory is the mean of change_percent by week",
                ),
                OutputSpec::new(
                    OutcomesFlag::InsufficientData.as_str(),
                    "flag",
                    "",
                    "no weigh-in on or after enrolment yet",
                ),
                OutputSpec::new(
                    OutcomesFlag::FastLoss.as_str(),
                    "flag",
                    "",
                    "sustained loss faster than the limit",
                ),
                OutputSpec::new(
                    OutcomesFlag::LowIntake.as_str(),
                    "flag",
                    "",
                    "intake below the floor: the upper 95 % bound of the intake the weight trend implies is below it, or the food log is below it on most of, or on average over, at least 4 logged days and the implied intake's lower 95 % bound is too, or the log is without weigh-ins to check it (energy module)",
                ),
                OutputSpec::new(
                    OutcomesFlag::VeryLowIntake.as_str(),
                    "flag",
                    "",
                    "mean logged intake below the VLCD limit",
                ),
                OutputSpec::new(
                    OutcomesFlag::LowBmi.as_str(),
                    "flag",
                    "",
                    "current BMI under underweight_bmi_below, or under low_bmi_losing_below while the trend still falls",
                ),
                OutputSpec::new(
                    OutcomesFlag::LabDiabetesRange.as_str(),
                    "flag",
                    "",
                    "latest lab value in the diabetes range",
                ),
                OutputSpec::new(
                    OutcomesFlag::LabPrediabetesRange.as_str(),
                    "flag",
                    "",
                    "latest lab value in the prediabetes range",
                ),
                OutputSpec::new(
                    OutcomesFlag::LabLowGlucose.as_str(),
                    "flag",
                    "",
                    "latest fasting glucose below 70 mg/dL (3.9 mmol/L), low blood sugar",
                ),
                OutputSpec::new(
                    OutcomesFlag::LabSevereBp.as_str(),
                    "flag",
                    "",
                    "latest blood pressure above 180 mmHg systolic or 120 mmHg diastolic",
                ),
                OutputSpec::new(
                    OutcomesFlag::LabLowEgfr.as_str(),
                    "flag",
                    "",
                    "latest eGFR 30-59 mL/min/1.73 m2 (KDIGO 2012 G3a-G3b)",
                ),
                OutputSpec::new(
                    OutcomesFlag::LabVeryLowEgfr.as_str(),
                    "flag",
                    "",
                    "latest eGFR below 30 mL/min/1.73 m2 (KDIGO 2012 G4-G5; holds every suggestion)",
                ),
                OutputSpec::new(
                    OutcomesFlag::FastGain.as_str(),
                    "flag",
                    "",
                    "trend gain faster than fast_loss_kg_per_week over fast_loss_span_days",
                ),
                OutputSpec::new(
                    OutcomesFlag::Pregnancy.as_str(),
                    "flag",
                    "",
                    "pregnancy noted in the profile (holds every suggestion)",
                ),
                OutputSpec::new(
                    OutcomesFlag::Breastfeeding.as_str(),
                    "flag",
                    "",
                    "breastfeeding noted in the profile (holds every suggestion)",
                ),
                OutputSpec::new(
                    OutcomesFlag::MedicationReview.as_str(),
                    "flag",
                    "",
                    "glucose-lowering medicine with fast loss, low intake, intake below resting energy, a trend that implies a very low intake, or a fasting glucose below 70 mg/dL",
                ),
                OutputSpec::new(
                    OutcomesFlag::BelowRestingIntake.as_str(),
                    "flag",
                    "",
                    "intake below resting energy (Mifflin-St Jeor) over the last 28 days: the upper 95 % bound of the intake the weight trend implies is below it, or the food log is below it on most logged days or on average and the implied intake agrees (energy module)",
                ),
            ],
            requires: vec![TREND_MODULE.into()],
        }
    }

    fn compute(
        &self,
        ctx: &ModuleContext,
        data: &ParticipantData,
    ) -> Result<ModuleOutput, ModuleError> {
        let profile = &data.profile;
        let mut output = ModuleOutput::default();
        let w = Weights::of(ctx, data);
        let bmi1 = push_weight_outcomes(&mut output, ctx, data, &w);
        let weigh_in_days: Vec<NaiveDate> = w.raw.iter().map(|r| r.0).collect();
        output
            .tables
            .push(milestones_table(w.w0, &w.levels, &weigh_in_days));
        output.tables.push(trajectory_table(
            w.w0,
            &w.trend_points,
            profile.enrolled,
            ctx.period.to,
        ));
        // Labs up to the end of the period.
        let labs: Vec<&LabResult> = data
            .labs
            .iter()
            .filter(|l| l.date <= ctx.period.to)
            .collect();
        output.tables.push(labs_table(&labs, profile.sex));

        // ---- Flags ----
        if w.w0.is_none() {
            output.push_flag(
                OutcomesFlag::InsufficientData.as_str(),
                FlagSeverity::Info,
                "No weigh-in on or after enrolment yet, so weight outcomes cannot be shown.",
            );
        }
        let fast = push_fast_loss_flag(&mut output, ctx, &w.levels);
        push_fast_gain_flag(&mut output, ctx, &w.levels);
        let low_intake = push_intake_flags(&mut output, ctx, data);
        let below_resting = push_below_resting_flag(&mut output, ctx, data, w.current);
        push_low_bmi_flag(
            &mut output,
            ctx,
            bmi1,
            &w,
            profile.whole_years_on(ctx.period.to),
        );
        let low_glucose = push_lab_flags(&mut output, &labs, profile.sex);
        // The energy module, when it ran before this one, says when the weight trend implies
        // an intake below a very-low-calorie diet's (its clinical flag): on a glucose-lowering
        // medicine that is the same risk as low logged intake.
        let implied_low = ctx.earlier.get(ENERGY_MODULE).is_some_and(|o| {
            o.flags
                .iter()
                .any(|f| f.code == ENERGY_VERY_LOW_IMPLIED_INTAKE)
        });
        // A fasting glucose below 70 mg/dL on a glucose-lowering medicine is the risk this
        // review is for, measured: the dose may now lower blood sugar too far (ADA Standards of
        // Care 2025, §6: a glucose below 70 mg/dL is level 1 hypoglycaemia, and the treatment
        // plan of someone on a glucose-lowering medicine who has it is to be re-evaluated; from
        // memory).
        if profile.flags.iter().any(|f| f == GLUCOSE_LOWERING_FLAG)
            && (fast || low_intake || below_resting || implied_low || low_glucose)
        {
            push_medication_flag(
                &mut output,
                MedicationCauses {
                    fast,
                    low_intake,
                    below_resting,
                    implied_low,
                    low_glucose,
                },
            );
        }
        if profile.flags.iter().any(|f| f == PREGNANCY_FLAG) {
            // Weight-loss targets, the intake floors and the energy model are for adults who
            // are not pregnant; weight gain is expected in pregnancy (IOM 2009, Weight Gain
            // During Pregnancy — from memory), so the report holds every suggestion.
            output.push_flag(
                OutcomesFlag::Pregnancy.as_str(),
                FlagSeverity::Clinical,
                "The profile notes a pregnancy. Weight change and eating during pregnancy \
                 should be guided by a licensed clinician or midwife; this report's loss \
                 targets and estimates are for adults who are not pregnant.",
            );
        }
        if profile.flags.iter().any(|f| f == BREASTFEEDING_FLAG) {
            // Milk takes energy the model does not count (IOM 2005 DRI for energy: several
            // hundred kcal a day; from memory), and the floors are for adults who are not
            // breastfeeding: the report holds every suggestion (common practice).
            output.push_flag(
                OutcomesFlag::Breastfeeding.as_str(),
                FlagSeverity::Clinical,
                "The profile notes breastfeeding. Making milk takes several hundred kcal a day \
                 that this report's energy figures do not count, and its intake floors are for \
                 adults who are not breastfeeding; eating and weight while breastfeeding \
                 should be guided by a licensed clinician or midwife.",
            );
        }
        Ok(output)
    }
}

/// The weights the outcomes are built from.
struct Weights {
    /// Daily mean weigh-ins from enrolment to the end of the period.
    raw: Vec<(NaiveDate, f64)>,
    /// Starting weight: the first weigh-in day on or after enrolment.
    w0: Option<f64>,
    /// Current weight with its interval.
    current: Option<f64>,
    lower: Option<f64>,
    upper: Option<f64>,
    /// Where the current weight came from.
    source: CurrentWeightSource,
    /// Trend levels by day from the baseline day, else the raw daily means.
    levels: Vec<(NaiveDate, f64)>,
    /// The trend series as the trend module gave it (day, level kg).
    trend_points: Vec<(NaiveDate, f64)>,
    /// The trend's slope, kg/week, when the trend module gave one.
    trend_rate: Option<f64>,
    /// Whether the trend is still falling: status `losing`, or the slope's whole 95 %
    /// interval below zero.
    trend_falling: bool,
}

impl Weights {
    fn of(ctx: &ModuleContext, data: &ParticipantData) -> Weights {
        let profile = &data.profile;
        let to = ctx.period.to;
        // The trend's output, read through its view (an output that does not read is treated
        // as no trend, and fails loudly in debug builds).
        let trend = ctx.earlier.get(TREND_MODULE).and_then(|o| {
            TrendView::from_output(o)
                .inspect_err(|e| debug_assert!(false, "{e}"))
                .ok()
        });

        // Baseline: the first weigh-in day on or after enrolment, mean of that day, moved by
        // the steps the trend found in the weigh-ins since (another scale, a unit mistake): the
        // change since the start is then counted on one level, as the trend is.
        // When the profile marks the steps as real changes of body weight (fluid, surgery;
        // `REAL_STEPS_FLAG`), the baseline stays as weighed and the trend levels are put back
        // onto the weigh-ins' own level before each step, so the change since the start, the
        // milestones and the largest loss count the steps.
        let raw = daily_means(data, profile.enrolled, to);
        let baseline = raw.first().copied();
        let real_steps = profile.flags.iter().any(|f| f == REAL_STEPS_FLAG);
        let steps = trend.as_ref().map_or(&[][..], |t| &t.weigh_in_steps[..]);
        let moved = |d: NaiveDate| {
            if real_steps {
                0.0
            } else {
                step_shift_after(steps, d)
            }
        };
        let w0 = baseline.map(|b| b.1 + moved(b.0));
        // What the trend moved a day by, taken off again for real steps.
        let put_back = |d: NaiveDate| {
            if real_steps {
                -step_shift_after(steps, d)
            } else {
                0.0
            }
        };

        // Current weight: the trend's, else the last weigh-in day.
        let trend_current = trend.as_ref().map(|t| t.current_weight_kg);
        let (current, lower, upper, source) = match trend_current {
            Some(s) if s.value.is_some() => (s.value, s.lower, s.upper, CurrentWeightSource::Trend),
            _ => (
                raw.last().map(|r| r.1),
                None,
                None,
                CurrentWeightSource::WeighIns,
            ),
        };
        // Trend levels from the trend series, else from the raw daily means.
        let levels: Vec<(NaiveDate, f64)> = match trend.as_ref().map(|t| &t.weight_trend) {
            Some(s) if !s.points.is_empty() => {
                let by_day: BTreeMap<NaiveDate, f64> = s
                    .points
                    .iter()
                    .filter(|p| p.date <= to && baseline.is_some_and(|b| p.date >= b.0))
                    .map(|p| (p.date, p.value + put_back(p.date)))
                    .collect();
                by_day.into_iter().collect()
            }
            _ => raw.clone(),
        };
        let trend_points = trend.as_ref().map_or_else(Vec::new, |t| {
            t.weight_trend
                .points
                .iter()
                .map(|p| (p.date, p.value))
                .collect()
        });
        let trend_rate = trend.as_ref().and_then(|t| t.slope_kg_per_week.value);
        let trend_falling = trend.as_ref().is_some_and(|t| {
            t.status == Status::Losing || t.slope_kg_per_week.upper.is_some_and(|u| u < 0.0)
        });
        Weights {
            raw,
            w0,
            current,
            lower,
            upper,
            source,
            levels,
            trend_points,
            trend_rate,
            trend_falling,
        }
    }
}

/// Starting and current weight, change, BMI, rate and largest loss, with their categories.
/// Returns the current BMI.
fn push_weight_outcomes(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    data: &ParticipantData,
    w: &Weights,
) -> Option<f64> {
    let (w0, current) = (w.w0, w.current);
    let m = data.profile.height.m();
    let bmi_of = |kg: Option<f64>| kg.filter(|_| m > 0.0).map(|kg| bmi(kg, m));
    let change = w0.zip(current).map(|(a, b)| b - a);
    let change_pct = w0.zip(change).map(|(a, c)| 100.0 * c / a);
    let (bmi0, bmi1) = (bmi_of(w0), bmi_of(current));

    output.push_scalar(names::BASELINE_WEIGHT_KG, w0, "kg", "Starting weight");
    output.push_interval(
        names::CURRENT_WEIGHT_KG,
        current,
        w.lower,
        w.upper,
        "kg",
        "Current weight",
    );
    output.push_scalar(names::CHANGE_KG, change, "kg", "Weight change");
    output.push_scalar(names::CHANGE_PERCENT, change_pct, "%", "Weight change");
    output.push_scalar(names::BMI_BASELINE_KG_M2, bmi0, "kg/m2", "Starting BMI");
    output.push_scalar(names::BMI_CURRENT_KG_M2, bmi1, "kg/m2", "Current BMI");
    output.push_scalar(
        names::BMI_CHANGE_KG_M2,
        bmi0.zip(bmi1).map(|(a, b)| b - a),
        "kg/m2",
        "BMI change",
    );
    let rate = match w.trend_rate {
        Some(r) => Some(r),
        None => {
            let in_period: Vec<_> = w
                .raw
                .iter()
                .copied()
                .filter(|(d, _)| *d >= ctx.period.from)
                .collect();
            ols_slope_per_week(&in_period)
        }
    };
    output.push_scalar(
        names::RATE_KG_PER_WEEK,
        rate,
        "kg/wk",
        "Rate of change per week",
    );
    let max_loss = w0.filter(|_| !w.levels.is_empty()).map(|w0| {
        w.levels
            .iter()
            .map(|(_, l)| 100.0 * (w0 - l) / w0)
            .fold(0.0, f64::max)
    });
    output.push_scalar(
        names::MAX_LOSS_PERCENT,
        max_loss,
        "%",
        "Largest loss so far",
    );

    if let Some(b) = bmi0 {
        let c = who_bmi_class(b);
        output.push_text(names::BMI_CATEGORY_BASELINE, c.as_str(), c.label());
    }
    if let Some(b) = bmi1 {
        let c = who_bmi_class(b);
        output.push_text(names::BMI_CATEGORY_CURRENT, c.as_str(), c.label());
    }
    if let Some(p) = change_pct {
        let c = weight_change_class(p);
        output.push_text(names::WEIGHT_CHANGE_CATEGORY, c.as_str(), c.label());
    }
    output.push_text(
        names::CURRENT_WEIGHT_SOURCE,
        w.source.as_str(),
        w.source.label(),
    );
    bmi1
}

/// The trajectory: for each week counted from enrolment (days 0–6 are week 0), the trend
/// weight on its last day, up to the period's end, and its change in % of the starting weight
/// `w0`. No rows without a starting weight.
fn trajectory_table(
    w0: Option<f64>,
    trend: &[(NaiveDate, f64)],
    enrolled: NaiveDate,
    to: NaiveDate,
) -> Table {
    let rows = match w0 {
        Some(b) if b > 0.0 => trend
            .iter()
            .filter(|(d, _)| *d >= enrolled && *d <= to)
            .filter_map(|&(date, weight_kg)| {
                let days = (date - enrolled).num_days();
                (days % 7 == 6).then(|| TrajectoryRow {
                    week: (days / 7) as u32,
                    date,
                    weight_kg,
                    change_percent: 100.0 * (weight_kg - b) / b,
                })
            })
            .map(|r| r.write())
            .collect(),
        _ => Vec::new(),
    };
    Table {
        name: names::TRAJECTORY.into(),
        label: TRAJECTORY_LABEL.into(),
        columns: TrajectoryRow::columns(),
        rows,
    }
}

/// Milestones: reached on the first weigh-in day on which the trend level is at or below the
/// threshold weight.
///
/// # Remarks
/// The trend's crossing day alone read more precise than the records are: someone weighed on
/// 2 April, 10 June and 20 September read "3 % loss · reached 19 Aug", a point on the line drawn
/// across 102 days without a weigh-in. The weigh-in that showed the loss dates it (for a daily
/// weigher, the same day or the next); a crossing after the last weigh-in is a projection of the
/// trend, not a milestone reached. `weigh_in_days` is sorted.
///
/// The first weigh-in on or after the crossing is not always one that showed it: a smoothed
/// trend drawn across a gap carries its slope on and comes back (weighed down to 97.3 kg of 100
/// by 15 April, then at 97.45 from 1 June, the trend went to 96.4 in between), and the
/// report read "3 % loss · reached 1 Jun 2026" for a weigh-in at which neither the trend nor
/// the scale was below 97 kg. On a weigh-in day the trend is at or below the threshold, or the
/// milestone is not reached; when the trend stays below after crossing, this is the first
/// weigh-in on or after the crossing, as before.
fn milestones_table(
    w0: Option<f64>,
    levels: &[(NaiveDate, f64)],
    weigh_in_days: &[NaiveDate],
) -> Table {
    let level_on: BTreeMap<NaiveDate, f64> = levels.iter().copied().collect();
    let rows = MILESTONES_PERCENT
        .into_iter()
        .map(|t| {
            let threshold = w0.map(|w0| w0 - w0 * t / 100.0);
            let reached = threshold.and_then(|thr| {
                weigh_in_days
                    .iter()
                    .copied()
                    .find(|d| level_on.get(d).is_some_and(|l| *l <= thr + CUT_EPS))
            });
            MilestoneRow {
                threshold_percent: t,
                threshold_weight_kg: threshold,
                reached: reached.is_some(),
                date_reached: reached,
            }
            .write()
        })
        .collect();
    Table {
        name: names::MILESTONES.into(),
        label: MILESTONES_LABEL.into(),
        columns: MilestoneRow::columns(),
        rows,
    }
}

/// The lab results with their categories and converted values.
fn labs_table(labs: &[&LabResult], sex: Option<Sex>) -> Table {
    Table {
        name: names::LABS.into(),
        label: LABS_LABEL.into(),
        columns: LabRow::columns(),
        rows: labs
            .iter()
            .map(|l| {
                let alt = lab_alt(l);
                LabRow {
                    date: l.date,
                    test: l.test,
                    value: l.value,
                    unit: l.test.canonical_unit().into(),
                    value_alt: alt.map(|a| a.0),
                    unit_alt: alt.map(|a| a.1.into()),
                    category: lab_category(l, sex),
                    // An estimate from a bound would read as a measurement: left out.
                    eag_mg_dl: (l.test == LabTest::Hba1c && l.censored.is_none())
                        .then(|| eag_mg_dl(l.value)),
                    qualifier: l.censored,
                }
                .write()
            })
            .collect(),
    }
}

/// `fast_loss_kg_per_week` and `fast_loss_span_days` (shared by the fast-loss and fast-gain
/// flags).
fn fast_change_settings(ctx: &ModuleContext) -> (f64, usize) {
    let limit = ctx.setting_f64("fast_loss_kg_per_week", 1.0);
    let span = ctx
        .setting_f64("fast_loss_span_days", 21.0)
        .round()
        .max(1.0) as usize;
    (limit, span)
}

/// [`fast_loss_spans`] of the trend level × `sign` (1 = loss, −1 = gain) up to the end of the
/// period, kept only when the latest span ends in the period: a fast spell months ago was
/// flagged in that month's report and is not raised again every month after.
fn fast_spans_in_period(
    ctx: &ModuleContext,
    levels: &[(NaiveDate, f64)],
    sign: f64,
) -> Option<(f64, (NaiveDate, NaiveDate, f64), NaiveDate)> {
    let (limit, span) = fast_change_settings(ctx);
    let daily: Vec<(NaiveDate, f64)> = fill_daily(levels)
        .into_iter()
        .filter(|(d, _)| *d <= ctx.period.to)
        .map(|(d, v)| (d, sign * v))
        .collect();
    fast_loss_spans(&daily, span, limit).filter(|(_, (_, end, _), _)| *end >= ctx.period.from)
}

/// The `fast_loss` flag; returns whether it was raised.
fn push_fast_loss_flag(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    levels: &[(NaiveDate, f64)],
) -> bool {
    let (limit, span) = fast_change_settings(ctx);
    let Some((fastest, (d0, d1, rate), from)) = fast_spans_in_period(ctx, levels, 1.0) else {
        return false;
    };
    // How long the loss has been this fast, not only the test's window: "over 21 days in a row
    // (most recently 6 Nov to 27 Nov)" was all a clinician read of 26 weeks at 1.6 kg a week.
    // "Over every 21-day span from … to …": it read "in every 21 days from … (the last 21, …)".
    let when = if from < d0 {
        format!(
            "over every {span}-day span from {from} to {d1} (the last one, {d0} to {d1}: {} a \
             week; fastest {} a week)",
            rate_beside_limit(rate, limit),
            rate_beside_limit(fastest, limit),
        )
    } else {
        format!(
            "over {span} days in a row ({d0} to {d1}: {} a week; fastest {} a week)",
            rate_beside_limit(rate, limit),
            rate_beside_limit(fastest, limit),
        )
    };
    output.push_flag(
        OutcomesFlag::FastLoss.as_str(),
        FlagSeverity::Clinical,
        format!(
            "Weight came down faster than {} a week {when}. Losing more than about 1 kg (2 lb) \
             a week for several weeks is worth reviewing with a licensed clinician.",
            kg_lb(limit),
        ),
    );
    true
}

/// The `fast_gain` flag: the trend level rose faster than `fast_loss_kg_per_week` over
/// `fast_loss_span_days` in a row ending in the period. Tissue gain that fast needs a surplus of
/// about 1,100 kcal a day (overfeeding by 1,000 kcal/d gave about 0.7 kg a week: Bouchard et
/// al. 1990, N Engl J Med 322:1477 — from memory); such a rise is more often a change of scale
/// or clothing, or fluid (a warning sign a clinician should see, e.g. in heart failure — common
/// practice). Without this flag the report answered a 10 kg step in the weigh-ins with "eat
/// about 2,850 kcal a day less".
fn push_fast_gain_flag(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    levels: &[(NaiveDate, f64)],
) {
    let (limit, span) = fast_change_settings(ctx);
    // The same spans as for fast loss, on the level turned upside down.
    let Some((_, (d0, d1, rate), _)) = fast_spans_in_period(ctx, levels, -1.0) else {
        return;
    };
    output.push_flag(
        OutcomesFlag::FastGain.as_str(),
        FlagSeverity::Clinical,
        format!(
            "Weight went up faster than {} a week over {span} days in a row (most recently \
             {d0} to {d1}: {} a week). A rise this fast is more often a change of scale \
             or clothing, a mistyped weigh-in or fluid than body fat: please check the \
             weigh-ins, and review the rise with a licensed clinician.",
            kg_lb(limit),
            rate_beside_limit(rate, limit),
        ),
    );
}

/// The intake the `energy` module implies from the weight trend over its window (the last 28
/// days of the period by default), with its 95 % interval; `None` when the module did not run
/// before this one or gave no implied intake (too few weigh-ins, or withheld as below a
/// very-low-calorie diet's: its own flag then speaks).
#[derive(Debug, Clone, Copy, PartialEq)]
struct Implied {
    central: f64,
    lower: f64,
    upper: f64,
}

fn implied_intake(ctx: &ModuleContext) -> Option<Implied> {
    let energy = ctx.earlier.get(ENERGY_MODULE)?;
    let energy = EnergyView::from_output(energy)
        .inspect_err(|e| debug_assert!(false, "{e}"))
        .ok()?;
    let i = energy.implied_intake_kcal_per_day;
    let (central, upper) = (i.value?, i.upper?);
    // The lower of the interval's bound and the module's own scalar (the guidance reads the
    // same): the bound that lets the trend agree with a low log most readily.
    let lower = match (i.lower, energy.implied_intake_lower_kcal_per_day) {
        (Some(a), Some(b)) => a.min(b),
        (a, b) => a.or(b).unwrap_or(0.0),
    };
    [central, lower, upper]
        .iter()
        .all(|x| x.is_finite())
        .then_some(Implied {
            central,
            lower,
            upper,
        })
}

/// Which point of the implied intake's interval must lie below the threshold for the weight
/// trend to agree with a low food log.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Agreement {
    /// The central estimate: the trend must itself say "below" (`below_resting_intake`).
    Central,
    /// The lower 95 % bound: the trend must not clearly say "above" (`low_intake`).
    Lower,
}

/// One test of intake against a threshold, on the food log and the weight trend together: the
/// rule behind both `low_intake` and `below_resting_intake` (see the module docs).
struct IntakeTest {
    /// kcal/d.
    threshold: f64,
    /// Fewest logged days for the log to count at all.
    min_logged_days: usize,
    /// How far the trend must agree with a low log.
    agreement: Agreement,
    /// Whether a low log counts on its own when there is no implied intake to check it
    /// against (no weigh-ins, no energy module).
    log_alone: bool,
}

/// The logged days a test read: how many, how many below its threshold, and their mean.
#[derive(Debug, Clone, Copy, PartialEq)]
struct LogTally {
    days: usize,
    below: usize,
    mean: f64,
}

/// What raised an intake flag.
#[derive(Debug, Clone, Copy, PartialEq)]
enum IntakeEvidence {
    /// The implied intake's upper 95 % bound is below the threshold: the trend alone shows it.
    Trend(Implied),
    /// The log is below the threshold on most logged days or on average and the trend agrees.
    LogAndTrend(LogTally, Implied),
    /// The log is below it on most logged days or on average and no implied intake (from the
    /// weight trend) checks it: a trend may show on the chart and still imply no intake.
    LogAlone(LogTally),
}

impl IntakeTest {
    /// Whether intake was below the threshold, and on what evidence. A log is "below" when
    /// more than half of at least `min_logged_days` logged days, or their mean, are below the
    /// threshold.
    fn judge(&self, logged: &[f64], implied: Option<Implied>) -> Option<IntakeEvidence> {
        let days = logged.len();
        let below = logged.iter().filter(|k| **k < self.threshold).count();
        let tally = LogTally {
            days,
            below,
            mean: if days > 0 {
                logged.iter().sum::<f64>() / days as f64
            } else {
                f64::NAN
            },
        };
        // Below on most days, or on average: a few very low days pull the mean under the
        // threshold while most days sit just above it, and the mean is what the body meets.
        let log_low =
            days >= self.min_logged_days && (2 * below > days || tally.mean < self.threshold);
        match implied {
            Some(i) if i.upper < self.threshold => Some(IntakeEvidence::Trend(i)),
            Some(i) => {
                let point = match self.agreement {
                    Agreement::Central => i.central,
                    Agreement::Lower => i.lower,
                };
                (log_low && point < self.threshold).then_some(IntakeEvidence::LogAndTrend(tally, i))
            }
            None => (log_low && self.log_alone).then_some(IntakeEvidence::LogAlone(tally)),
        }
    }
}

/// "about 1100 kcal a day (95 % interval 900 to 1300)".
fn implied_words(i: Implied) -> String {
    format!(
        "about {:.0} kcal a day (95 % interval {:.0} to {:.0})",
        i.central, i.lower, i.upper
    )
}

/// The `very_low_intake` / `low_intake` flags (only the more serious one); returns whether one
/// was raised.
///
/// `very_low_intake` reads the food log alone: a mean below a very-low-calorie diet's is put
/// before a clinician whatever the trend says. `low_intake` is the shared [`IntakeTest`] at
/// the sex-specific floor: logged intake below the floor on most of, or on average over, at least
/// [`MIN_INTAKE_DAYS`] logged days in the period, unless the weight trend clearly contradicts
/// it (the implied intake's whole 95 % interval at or above the floor), or the implied
/// intake's upper bound below the floor with or without a log; with no implied intake at all
/// (no weigh-ins) the log alone raises it, on the safe side. Food logs leave out 10–45 % of
/// intake (Trabulsi & Schoeller 2001, Am J Physiol Endocrinol Metab 281:E891, from memory): a
/// log that the trend shows to be well short of what was eaten is under-reporting, not a low
/// intake (sample program, September: a man at BMI 23.5 with a steady weight logged 1,476
/// kcal/d over 8 days while his trend implied about 2,060, 95 % 1,537 to 2,587, and was sent
/// to the clinician).
fn push_intake_flags(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    data: &ParticipantData,
) -> bool {
    let profile = &data.profile;
    let rows: Vec<_> = data
        .intake
        .iter()
        .filter(|i| ctx.period.contains(i.date) && i.date >= profile.enrolled)
        .collect();
    let intake: Vec<f64> = rows.iter().map(|i| i.kcal).collect();
    // The days the mean is over, named: the report prints the energy module's mean of the last
    // 28 days beside it ("579 kcal/day, last 4 weeks" beside "577 kcal a day over 30 logged
    // days" for June), and a clinician must see that they are two windows, not two readings.
    let span = match (
        rows.iter().map(|i| i.date).min(),
        rows.iter().map(|i| i.date).max(),
    ) {
        (Some(a), Some(b)) => format!(" from {a} to {b}"),
        _ => String::new(),
    };
    let female = || ctx.setting_f64("intake_floor_female", 1200.0);
    let male = || ctx.setting_f64("intake_floor_male", 1500.0);
    // Sex not recorded: the higher floor (the careful side for a flag).
    let floor = match profile.sex {
        Some(Sex::Female) => female(),
        Some(Sex::Male) => male(),
        None => female().max(male()),
    };
    let very_low = ctx.setting_f64("very_low_intake", 800.0);
    let days = intake.len();
    let mean = intake.iter().sum::<f64>() / days.max(1) as f64;
    // The days the log is read over, named in the message: the report's energy section gives
    // the logged intake of the last four weeks, a few days shorter than a month, and printed
    // 879 kcal beside this message's 877 "over 30 logged days" with nothing to tell the two
    // apart.
    let implied = implied_intake(ctx);
    // Very low subsumes low: one flag, the more serious one.
    if days >= MIN_INTAKE_DAYS && mean < very_low {
        // Raised on the log alone; a trend that puts the whole interval above the floor is
        // named beside it, so the clinician sees that the log may be incomplete.
        let trend = implied
            .filter(|i| i.lower >= floor)
            .map(|i| {
                format!(
                    " The weight trend implies {}, above {floor:.0} kcal a day: the log may be \
                     incomplete.",
                    implied_words(i)
                )
            })
            .unwrap_or_default();
        output.push_flag(
            OutcomesFlag::VeryLowIntake.as_str(),
            FlagSeverity::Clinical,
            format!(
                "Logged intake averaged about {mean:.0} kcal a day over {days} logged \
                 days{span}, below {very_low:.0} kcal a day.{trend} Eating this little is normally \
                 done only under medical supervision; please review it with a licensed \
                 clinician."
            ),
        );
        return true;
    }
    let test = IntakeTest {
        threshold: floor,
        min_logged_days: MIN_INTAKE_DAYS,
        agreement: Agreement::Lower,
        log_alone: true,
    };
    let unsupervised = "a level usually not advised without supervision";
    // Clinical like the very-low flag: intakes below the usual floors are for a licensed
    // clinician to review (the report's cautions say so).
    let message = match test.judge(&intake, implied) {
        None => return false,
        Some(IntakeEvidence::Trend(i)) => format!(
            "Over the last weeks of the period the weight trend implies an intake of {}: even the top of \
             that interval is below {floor:.0} kcal a day, {unsupervised}. Please review the \
             intake and the loss with a licensed clinician.",
            implied_words(i)
        ),
        Some(IntakeEvidence::LogAndTrend(t, i)) => format!(
            "Logged intake averaged about {:.0} kcal a day over {} logged days{span} and was below \
             {floor:.0} kcal a day, {unsupervised}, on {} of them; the weight trend does not \
             rule it out: it implies {}. If the log is complete, consider discussing it \
             with a licensed clinician.",
            t.mean,
            t.days,
            t.below,
            implied_words(i)
        ),
        Some(IntakeEvidence::LogAlone(t)) => format!(
            "Logged intake averaged about {:.0} kcal a day over {} logged days{span} and was below \
             {floor:.0} kcal a day, {unsupervised}, on {} of them; the weigh-ins give no \
             implied intake to check it against. If the log is complete, consider discussing it with a \
             licensed clinician.",
            t.mean, t.days, t.below
        ),
    };
    output.push_flag(
        OutcomesFlag::LowIntake.as_str(),
        FlagSeverity::Clinical,
        message,
    );
    true
}

/// The `below_resting_intake` flag (see the module docs): the shared [`IntakeTest`] at resting
/// energy over the last four weeks, the log counting only when the trend's central estimate
/// agrees and never on its own; returns whether it was raised.
fn push_below_resting_flag(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    data: &ParticipantData,
    current_kg: Option<f64>,
) -> bool {
    let profile = &data.profile;
    let to = ctx.period.to;
    let Some(kg) = current_kg else {
        return false;
    };
    let height_cm = profile.height.cm();
    if height_cm <= 0.0 {
        return false;
    }
    // Resting energy expenditure, kcal/d (Mifflin et al. 1990, Am J Clin Nutr 51:241), at the
    // current trend weight and the age at the period's end.
    // Sex not recorded: the male form, 166 kcal/d above the female one, so that intake below
    // resting energy is flagged rather than missed (the careful side for a flag).
    let rmr = mifflin_st_jeor(
        profile.sex.unwrap_or(Sex::Male),
        kg,
        height_cm,
        profile.age_on(to),
    );
    let from = (to - Duration::days(BELOW_RESTING_WINDOW_DAYS - 1)).max(profile.enrolled);
    // "For weeks": a window cut short by a recent enrolment must still hold two of them.
    let days = (to - from).num_days() + 1;
    if days < BELOW_RESTING_MIN_DAYS {
        return false;
    }
    let logged: Vec<f64> = data
        .intake
        .iter()
        .filter(|i| i.date >= from && i.date <= to)
        .map(|i| i.kcal)
        .collect();
    let test = IntakeTest {
        threshold: rmr,
        min_logged_days: BELOW_RESTING_MIN_LOGGED_DAYS,
        agreement: Agreement::Central,
        log_alone: false,
    };
    let window = format!("{days} days from {from} to {to}");
    let message = match test.judge(&logged, implied_intake(ctx)) {
        None | Some(IntakeEvidence::LogAlone(_)) => return false,
        Some(IntakeEvidence::Trend(i)) => format!(
            "Over the last {window} the weight trend implies an intake of {}: even the top \
             of that interval is below the resting energy expenditure estimated at the \
             current weight (about {rmr:.0} kcal a day, Mifflin–St Jeor). Eating below resting \
             energy for weeks is a warning sign; please review the intake and the loss with a \
             licensed clinician.",
            implied_words(i)
        ),
        Some(IntakeEvidence::LogAndTrend(t, i)) => format!(
            "Over the last {window} logged intake was below the resting energy \
             expenditure estimated at the current weight (about {rmr:.0} kcal a day, \
             Mifflin–St Jeor) on {} of {} logged days, and the weight trend agrees: it \
             implies an intake of {}. Eating below resting energy for weeks is a \
             warning sign; please review the intake and the loss with a licensed clinician.",
            t.below,
            t.days,
            implied_words(i)
        ),
    };
    output.push_flag(
        OutcomesFlag::BelowRestingIntake.as_str(),
        FlagSeverity::Clinical,
        message,
    );
    true
}

/// The `low_bmi` flag: current BMI in the WHO underweight class, or below
/// `low_bmi_losing_below` while the trend still falls (see the module docs).
fn push_low_bmi_flag(
    output: &mut ModuleOutput,
    ctx: &ModuleContext,
    bmi1: Option<f64>,
    w: &Weights,
    age: f64,
) {
    let Some(b) = bmi1 else {
        return;
    };
    let under = ctx.setting_f64("underweight_bmi_below", UNDERWEIGHT_BMI_BELOW);
    if !at_least(b, under) {
        let cut = if (under - UNDERWEIGHT_BMI_BELOW).abs() < CUT_EPS {
            "18.5, the lower limit of the normal range (WHO)".to_string()
        } else {
            format!("{}, the program's cut-off for a low BMI", cut_words(under))
        };
        output.push_flag(
            OutcomesFlag::LowBmi.as_str(),
            FlagSeverity::Clinical,
            format!(
                "Current BMI is about {:.1} kg/m², below {cut}. Further weight loss should be \
                 reviewed with a licensed clinician.",
                bmi_one_decimal(b)
            ),
        );
        return;
    }
    let near = ctx.setting_f64("low_bmi_losing_below", LOW_BMI_LOSING_BELOW);
    let older = age >= OLDER_ADULT_AGE;
    // From 70 the higher of the two cut-offs: a program that raises the general one keeps it.
    let near = if older {
        near.max(ctx.setting_f64("low_bmi_losing_below_70_plus", LOW_BMI_LOSING_BELOW_70_PLUS))
    } else {
        near
    };
    // The same rule for cut points as every class (`at_least`): a BMI printed and classed as
    // 20.0 is not "under 20".
    if !at_least(b, near) && w.trend_falling {
        let rate = w
            .trend_rate
            .filter(|r| *r < 0.0)
            .map(|r| format!(" (about {} a week)", kg_lb(-r)))
            .unwrap_or_default();
        let why = if older {
            format!(
                "below {}, where a BMI counts as low at age 70 or over (GLIM)",
                cut_words(near)
            )
        } else {
            "close to 18.5, the lower limit of the normal range (WHO)".to_string()
        };
        output.push_flag(
            OutcomesFlag::LowBmi.as_str(),
            FlagSeverity::Clinical,
            format!(
                "Current BMI is about {:.1} kg/m², {why}, and the weight trend is still going \
                 down{rate}. Losing more at this weight is not advised without a licensed \
                 clinician: please see one about the loss before going on.",
                bmi_one_decimal(b)
            ),
        );
    }
}

/// A BMI cut-off as written: `22`, `21.5` (a decimal only when it has one).
fn cut_words(v: f64) -> String {
    let tenths = (v * 10.0).round();
    if tenths % 10.0 == 0.0 {
        format!("{:.0}", tenths / 10.0)
    } else {
        format!("{:.1}", tenths / 10.0)
    }
}

/// The lab-range flags, judged on the latest value of each test; returns whether
/// `lab_low_glucose` was raised.
fn push_lab_flags(output: &mut ModuleOutput, labs: &[&LabResult], sex: Option<Sex>) -> bool {
    let mut low_glucose = false;
    // One reading, systolic and diastolic: one flag naming what is above the line.
    let mut severe_bp: Vec<String> = Vec::new();
    let mut latest: BTreeMap<LabTest, &LabResult> = BTreeMap::new();
    for l in labs {
        latest.insert(l.test, l);
    }
    for l in latest.values() {
        // Above the severe-hypertension line (strictly: 180/120 itself is not above it; a
        // censored `> 180` is above it, a `< 190` is not known to be).
        let severe_cut = match l.test {
            LabTest::SystolicBp => Some(SEVERE_BP_MMHG.0),
            LabTest::DiastolicBp => Some(SEVERE_BP_MMHG.1),
            _ => None,
        };
        if let Some(cut) = severe_cut {
            let above = match l.censored {
                None | Some(Censor::AtLeast) => l.value > cut + CUT_EPS,
                Some(Censor::Above) => l.value >= cut - CUT_EPS,
                Some(Censor::Below) | Some(Censor::AtMost) => false,
            };
            if above {
                let q = l
                    .censored
                    .map_or(String::new(), |c| format!("{} ", c.symbol()));
                // Whole mmHg as measured; a decimal only when the value has one, so that 180.4
                // is not printed "180" beside "above 180".
                let shown = if (l.value - l.value.round()).abs() < 1e-9 {
                    format!("{:.0}", l.value)
                } else {
                    format!("{:.1}", l.value)
                };
                severe_bp.push(format!(
                    "{} {q}{shown} mmHg on {}",
                    if l.test == LabTest::SystolicBp {
                        "systolic"
                    } else {
                        "diastolic"
                    },
                    l.date
                ));
            }
            continue;
        }
        let category = lab_category(l, sex);
        if l.test == LabTest::Egfr {
            push_egfr_flag(output, l);
            continue;
        }
        let (code, severity) = match category {
            LabCategory::DiabetesRange => (OutcomesFlag::LabDiabetesRange, FlagSeverity::Clinical),
            LabCategory::PrediabetesRange => {
                (OutcomesFlag::LabPrediabetesRange, FlagSeverity::Notice)
            }
            LabCategory::BelowNormalRange => {
                low_glucose = true;
                (OutcomesFlag::LabLowGlucose, FlagSeverity::Clinical)
            }
            _ => continue,
        };
        // A censored value is printed as the bound it is (`> 14.0 %`), never as the number.
        let q = l
            .censored
            .map_or(String::new(), |c| format!("{} ", c.symbol()));
        let shown = match l.test {
            LabTest::Hba1c => format!("{q}{:.1} %", lab_shown(l.test, l.value, "%", 1)),
            _ => format!(
                "{q}{:.1} mmol/L ({q}{:.0} mg/dL)",
                lab_shown(l.test, l.value, "mmol/L", 1),
                lab_shown(l.test, l.value * GLUCOSE_MGDL_PER_MMOLL, "mg/dL", 0)
            ),
        };
        output.push_flag(
            code.as_str(),
            severity,
            format!(
                "The most recent {} ({shown}, {}) is {} (ADA Standards of Care). \
                 One result is not a diagnosis; please review it with a licensed clinician.",
                test_words(l.test),
                l.date,
                category.label(),
            ),
        );
    }
    if !severe_bp.is_empty() {
        let (sys, dia) = SEVERE_BP_MMHG;
        output.push_flag(
            OutcomesFlag::LabSevereBp.as_str(),
            FlagSeverity::Clinical,
            format!(
                "The most recent blood pressure ({}) is above {sys}/{dia} mmHg, a level counted \
                 as severe high blood pressure (ACC/AHA 2017). Please have it checked by a \
                 licensed clinician soon, before changing how you eat or how active you are; \
                 with chest pain, shortness of breath, a severe headache, or changes in vision \
                 or speech, seek urgent care.",
                severe_bp.join(" and ")
            ),
        );
    }
    low_glucose
}

/// The eGFR flags on the latest eGFR (G3a–G3b: `lab_low_egfr`; G4–G5: `lab_very_low_egfr`).
/// A `<` bound is judged at the highest value it allows, which the true value is at or below,
/// so on the safe side (`< 60` is below 60, and flagged); a `>` bound is not known to be below
/// any cut-off and raises none.
fn push_egfr_flag(output: &mut ModuleOutput, l: &LabResult) {
    let (class, lower) = match l.censored {
        None => (egfr_class(l.value), false),
        Some(Censor::Below) => (egfr_class(l.value - 2.0 * CUT_EPS), true),
        Some(Censor::AtMost) => (egfr_class(l.value), true),
        Some(Censor::Above | Censor::AtLeast) => return,
    };
    let code = match class {
        LabCategory::EgfrG3a | LabCategory::EgfrG3b => OutcomesFlag::LabLowEgfr,
        LabCategory::EgfrG4 | LabCategory::EgfrG5 => OutcomesFlag::LabVeryLowEgfr,
        _ => return,
    };
    let q = l
        .censored
        .map_or(String::new(), |c| format!("{} ", c.symbol()));
    // A bound may lie in a lower class than the one its bound is in.
    let class_words = if lower && class != LabCategory::EgfrG5 {
        format!("{} or lower", class.label())
    } else {
        class.label().to_string()
    };
    let (cut, after) = if code == OutcomesFlag::LabVeryLowEgfr {
        (
            VERY_LOW_EGFR,
            "At this level kidney care usually guides eating, so this report makes no \
             suggestions for change until a clinician has looked at it.",
        )
    } else {
        (
            LOW_EGFR,
            "Please talk to your clinician before acting on any suggestion in this report.",
        )
    };
    output.push_flag(
        code.as_str(),
        FlagSeverity::Clinical,
        format!(
            "The most recent eGFR, an estimate of kidney function ({q}{:.0} mL/min/1.73 m², {}), \
             is {class_words} in the KDIGO 2012 categories, below {cut:.0}. One result is not \
             a diagnosis; please review it with a licensed clinician. {after}",
            lab_shown(l.test, l.value, "mL/min/1.73 m²", 0),
            l.date,
        ),
    );
}

/// What calls for a medication review (see [`push_medication_flag`]).
#[derive(Debug, Clone, Copy, Default)]
struct MedicationCauses {
    fast: bool,
    low_intake: bool,
    below_resting: bool,
    implied_low: bool,
    /// The latest fasting glucose is below 70 mg/dL (`lab_low_glucose`).
    low_glucose: bool,
}

/// The `medication_review` flag (raised by the caller only with fast loss, low logged intake,
/// a weight trend that implies a very low intake, or a fasting glucose below 70 mg/dL).
fn push_medication_flag(output: &mut ModuleOutput, c: MedicationCauses) {
    let mut causes = Vec::new();
    if c.fast {
        causes.push("fast weight loss");
    }
    if c.low_intake {
        causes.push("a low intake");
    } else if c.below_resting {
        causes.push("an intake below resting energy for weeks");
    } else if c.implied_low {
        causes.push("a weight trend that only a very low intake would explain");
    }
    if c.low_glucose {
        causes.push("a fasting glucose below 70 mg/dL (3.9 mmol/L)");
    }
    let why = causes.join(" and ");
    output.push_flag(
        OutcomesFlag::MedicationReview.as_str(),
        FlagSeverity::Clinical,
        format!(
            "The profile notes a glucose-lowering medicine. With {why}, the dose that \
             suited before may now lower blood sugar too far. Please ask the clinician \
             who prescribes it whether the dose needs review; do not change it without \
             their advice."
        ),
    );
}

/// The codes of a closed set, for an output's description: "`a` (label), `b` (label)".
fn codes<C: cohortpress_metric_api::view::Code>() -> String {
    C::all()
        .iter()
        .map(|c| format!("`{}` ({})", c.code(), c.label()))
        .collect::<Vec<_>>()
        .join(", ")
}

#[cfg(test)]
mod tests {
    use super::*;

    fn d(s: &str) -> NaiveDate {
        s.parse().unwrap()
    }

    /// A trend drawn across a gap in the weigh-ins can dip below a milestone and come back:
    /// weighed down to 97.3 kg of 100 by 15 April, then at 97.45 from 1 June, and the trend
    /// at 96.4 in May. "3 % loss · reached 1 Jun" named a weigh-in at which neither the trend
    /// nor the scale was below 97 kg. A milestone is reached on a weigh-in day on which the
    /// trend is at or below it; when the trend stays below, that is the first weigh-in on or
    /// after the crossing.
    #[test]
    fn a_milestone_is_reached_on_a_weigh_in_day_with_the_trend_below_it() {
        let days = |from: &str, to: &str| {
            let (from, to) = (d(from), d(to));
            from.iter_days().take_while(move |x| *x <= to)
        };
        // 100 kg on 1 April, down 0.2 kg a day to 96.4 on 19 April, flat to 19 May, back up
        // 0.1 kg a day to 97.4 on 29 May, flat after.
        let level = |x: NaiveDate| {
            let n = (x - d("2026-04-01")).num_days() as f64;
            match n {
                n if n <= 18.0 => 100.0 - 0.2 * n,
                n if n <= 48.0 => 96.4,
                n if n <= 58.0 => 96.4 + 0.1 * (n - 48.0),
                _ => 97.4,
            }
        };
        let levels: Vec<(NaiveDate, f64)> = days("2026-04-01", "2026-06-30")
            .map(|x| (x, level(x)))
            .collect();
        let reached = |weigh_ins: &[&str]| -> Vec<Option<NaiveDate>> {
            let weigh_ins: Vec<NaiveDate> = weigh_ins.iter().map(|s| d(s)).collect();
            let t = milestones_table(Some(100.0), &levels, &weigh_ins);
            t.rows
                .iter()
                .map(|r| match &r[3] {
                    cohortpress_metric_api::Cell::Text(s) => Some(d(s)),
                    _ => None,
                })
                .collect()
        };
        // Weighed on 1, 8 and 15 April, then from 1 June: the trend crossed 97 kg on 17 April
        // and was back above it by 26 May. No weigh-in showed 3 %.
        let sparse = [
            "2026-04-01",
            "2026-04-08",
            "2026-04-15",
            "2026-06-01",
            "2026-06-08",
        ];
        assert_eq!(reached(&sparse), [None, None, None, None]);
        // Weighed on 20 April as well: reached that day (the first weigh-in after crossing).
        let mut with = sparse.to_vec();
        with.insert(3, "2026-04-20");
        assert_eq!(reached(&with)[0], Some(d("2026-04-20")));
        assert_eq!(reached(&with)[1..], [None, None, None]);
    }

    /// A waist without a recorded sex gets no risk class: 85 cm is "increased risk" for a woman
    /// and "not increased" for a man (WHO 2011), and either label would be wrong for half of the
    /// people. The other tests do not depend on sex.
    #[test]
    fn a_waist_without_a_recorded_sex_has_no_risk_class() {
        let lab = |test: LabTest, value: f64| LabResult {
            date: d("2027-03-01"),
            test,
            value,
            unit_as_written: "cm".into(),
            value_as_written: value,
            censored: None,
        };
        let waist = lab(LabTest::Waist, 85.0);
        assert_eq!(
            lab_category(&waist, Some(Sex::Female)),
            LabCategory::IncreasedRisk
        );
        assert_eq!(
            lab_category(&waist, Some(Sex::Male)),
            LabCategory::NotIncreasedRisk
        );
        assert_eq!(lab_category(&waist, None), LabCategory::Recorded);
        let a1c = lab(LabTest::Hba1c, 6.5);
        assert_eq!(
            lab_category(&a1c, None),
            lab_category(&a1c, Some(Sex::Male))
        );
    }

    /// A censored lab value has the class every value beyond its bound has, or none: HbA1c
    /// `>14.0 %` is in the diabetes range (ADA Standards of Care 2025 §2: from 6.5 %), `<5.0 %`
    /// and `<5.7 %` normal, `>=6.5 %` diabetes, `>6.0 %` open (5.7–6.5 or above); waist `>102`
    /// cm for a man is above the 102 cm cut (WHO 2011, from memory), `>=102` is not certainly.
    /// A fasting glucose below 70 mg/dL (3.9 mmol/L) was classed "normal" and raised nothing (any
    /// value under 100 mg/dL was normal): 3.0 mmol/L, or a censored `< 2.5 mmol/L`, read as a
    /// normal result. It is low blood sugar (ADA 2025 §6, level 1 hypoglycaemia: < 70 mg/dL),
    /// for a licensed clinician.
    #[test]
    fn a_fasting_glucose_below_70_mg_dl_is_low_and_flagged_for_a_clinician() {
        let glucose = |value: f64, censored: Option<Censor>| LabResult {
            date: d("2027-03-01"),
            test: LabTest::FastingGlucose,
            value,
            unit_as_written: "mmol/L".into(),
            value_as_written: value,
            censored,
        };
        for (v, c, want) in [
            (3.0, None, LabCategory::BelowNormalRange),
            (3.85, None, LabCategory::BelowNormalRange), // 69.4 mg/dL
            (3.9, None, LabCategory::Normal),            // 70.3 mg/dL
            (5.0, None, LabCategory::Normal),
            (2.5, Some(Censor::Below), LabCategory::BelowNormalRange),
            (4.5, Some(Censor::Below), LabCategory::Recorded),
        ] {
            assert_eq!(lab_category(&glucose(v, c), None), want, "{v} {c:?}");
        }
        let low = glucose(3.0, None);
        let mut out = ModuleOutput::default();
        push_lab_flags(&mut out, &[&low], None);
        assert_eq!(out.flags.len(), 1);
        assert_eq!(out.flags[0].code, "lab_low_glucose");
        assert_eq!(out.flags[0].severity, FlagSeverity::Clinical);
        let m = &out.flags[0].message;
        assert!(m.contains("(3.0 mmol/L (54 mg/dL), 2027-03-01)"), "{m}");
        assert!(
            m.contains("hypoglycaemia") && m.contains("licensed clinician"),
            "{m}"
        );
        // A normal fasting glucose raises nothing.
        let mut out = ModuleOutput::default();
        push_lab_flags(&mut out, &[&glucose(4.8, None)], None);
        assert!(out.flags.is_empty());
    }

    #[test]
    fn a_censored_lab_value_is_classed_only_when_its_bound_decides() {
        let lab = |test: LabTest, value: f64, c: Censor| LabResult {
            date: d("2027-03-01"),
            test,
            value,
            unit_as_written: "%".into(),
            value_as_written: value,
            censored: Some(c),
        };
        use Censor::*;
        use LabCategory::*;
        for (test, v, c, want) in [
            (LabTest::Hba1c, 14.0, Above, DiabetesRange),
            (LabTest::Hba1c, 6.5, AtLeast, DiabetesRange),
            (LabTest::Hba1c, 6.5, Above, DiabetesRange),
            (LabTest::Hba1c, 6.0, Above, Recorded),
            (LabTest::Hba1c, 5.0, Below, Normal),
            (LabTest::Hba1c, 5.7, Below, Normal),
            (LabTest::Hba1c, 5.7, AtMost, Recorded),
            (LabTest::Hba1c, 6.5, Below, Recorded),
            (LabTest::Waist, 102.0, Above, SubstantiallyIncreasedRisk),
            (LabTest::Waist, 102.0, AtLeast, Recorded),
        ] {
            assert_eq!(
                lab_category(&lab(test, v, c), Some(Sex::Male)),
                want,
                "{test:?} {} {v}",
                c.symbol()
            );
        }
        // The flag keeps the bound as written: "> 14.0 %", never "14.0 %".
        let high = lab(LabTest::Hba1c, 14.0, Above);
        let mut out = ModuleOutput::default();
        push_lab_flags(&mut out, &[&high], None);
        assert_eq!(out.flags.len(), 1);
        assert_eq!(out.flags[0].code, "lab_diabetes_range");
        assert!(
            out.flags[0].message.contains("(> 14.0 %, 2027-03-01)"),
            "{}",
            out.flags[0].message
        );
        let low = lab(LabTest::Hba1c, 6.0, Above);
        let mut out = ModuleOutput::default();
        push_lab_flags(&mut out, &[&low], None);
        assert!(out.flags.is_empty(), "{:?}", out.flags);
    }

    /// 29.97 printed as "30.0" beside the class "25 to 29.9"; 18.46 as "about 18.5 kg/m², below
    /// 18.5" in the low-BMI flag.
    #[test]
    fn bmi_shown_to_one_decimal_never_crosses_its_class() {
        assert_eq!(bmi_one_decimal(29.97), 29.9);
        assert_eq!(bmi_one_decimal(18.46), 18.4);
        assert_eq!(bmi_one_decimal(22.3), 22.3);
        // Rounded as usual where no cut-off is crossed.
        assert_eq!(bmi_one_decimal(18.69), 18.7);
        assert_eq!(bmi_one_decimal(27.46), 27.5);
        assert_eq!(bmi_one_decimal(25.0 - 1e-12), 25.0);
        for b in [18.46, 18.5, 24.99, 25.0, 29.97, 34.96, 39.99, 40.0] {
            let shown = bmi_one_decimal(b);
            assert_eq!(who_bmi_class(shown), who_bmi_class(b), "{b} shown {shown}");
        }
    }

    #[test]
    fn fill_daily_interpolates_between_known_days() {
        let filled = fill_daily(&[(d("2027-03-01"), 90.0), (d("2027-03-05"), 88.0)]);
        let values: Vec<f64> = filled.iter().map(|p| p.1).collect();
        assert_eq!(values, vec![90.0, 89.5, 89.0, 88.5, 88.0]);
        assert_eq!(filled[4].0, d("2027-03-05"));
        assert!(fill_daily(&[]).is_empty());
    }

    #[test]
    fn ols_slope_of_a_line_is_its_slope() {
        let pts: Vec<_> = (0..10)
            .map(|k| {
                (
                    d("2027-03-01") + Duration::days(2 * k),
                    90.0 - 0.1 * k as f64,
                )
            })
            .collect();
        // 0.1 kg every 2 days = 0.35 kg/week.
        assert!((ols_slope_per_week(&pts).unwrap() + 0.35).abs() < 1e-12);
        assert_eq!(ols_slope_per_week(&pts[..1]), None);
    }
}

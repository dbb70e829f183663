//! A participant's checked data, as every module receives it.
//!
//! The loader has already dropped or repaired what it could not trust (and said so in its
//! diagnostics); what arrives here is sorted by date and in canonical units.

use crate::Targets;
use crate::units::{Length, Mass};
use chrono::{Datelike, NaiveDate};
use serde::{Deserialize, Serialize};
use std::collections::BTreeMap;

/// Sex as used by the energy equations.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Sex {
    /// Female.
    Female,
    /// Male.
    Male,
}

/// A participant's profile.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Profile {
    /// Participant id (letters, digits, `-`, `_`); names output files.
    pub id: String,
    /// Display name, shown only in the participant's own report.
    pub name: Option<String>,
    /// Sex for the energy equations; `None` when the profile says it is not recorded
    /// (`sex: unrecorded`): the equations then take the mean of the female and male forms with
    /// their difference as added uncertainty, and the safety floors take the higher value.
    /// Absent from the protocol's JSON when not recorded.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub sex: Option<Sex>,
    /// Birth date, when given.
    pub birth_date: Option<NaiveDate>,
    /// Age in whole years at enrolment (from `birth_date`, or as given).
    pub age_years: f64,
    /// Height.
    pub height: Length,
    /// Enrolment date.
    pub enrolled: NaiveDate,
    /// Withdrawal date, when the participant left.
    pub withdrew: Option<NaiveDate>,
    /// What the withdrawal was (meaningful only with `withdrew`): withdrawn consent (the
    /// default; nothing dated after `withdrew` is read) or only the program stopped (later
    /// weigh-ins are read as follow-up). Left out of the protocol's JSON when it is the
    /// default, so the request is the same as before the field existed.
    #[serde(default, skip_serializing_if = "WithdrawalReason::is_consent")]
    pub withdrawal_reason: WithdrawalReason,
    /// Group attributes (site, team, …).
    pub groups: BTreeMap<String, String>,
    /// Baseline body fat, % of body weight, when measured.
    pub body_fat_percent: Option<f64>,
    /// Targets after applying the participant's overrides to the program's.
    pub targets: Targets,
    /// Clinical flags that change cautions (e.g. `glucose-lowering-medication`).
    pub flags: Vec<String>,
}

/// Why a participant left (`withdrawal_reason:` in profile.yaml). Under the treatment-policy
/// strategy an intention-to-treat analysis keeps the weigh-ins of someone who only stopped the
/// intervention, while data after a withdrawal of consent must not be used (ICH E9(R1), 2019;
/// CONSORT 2010 flow diagram: "discontinued intervention" apart from withdrawn).
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum WithdrawalReason {
    /// Withdrew consent to the use of their data: nothing dated after `withdrew` is read.
    #[default]
    Consent,
    /// Stopped the program (discontinued the intervention): weigh-ins dated after `withdrew`
    /// are read as follow-up; food, activity, session and lab rows after it are not.
    StoppedProgram,
}

impl WithdrawalReason {
    /// The value as profile.yaml and the tidy metrics write it.
    pub fn as_str(self) -> &'static str {
        match self {
            WithdrawalReason::Consent => "consent",
            WithdrawalReason::StoppedProgram => "stopped_program",
        }
    }

    /// Whether this is the default, withdrawn consent.
    pub fn is_consent(&self) -> bool {
        *self == WithdrawalReason::Consent
    }
}

impl Profile {
    /// Whether weigh-ins dated after `withdrew` are read (as follow-up): only for someone who
    /// stopped the program, never after withdrawn consent.
    pub fn follow_up_weigh_ins(&self) -> bool {
        self.withdrew.is_some() && self.withdrawal_reason == WithdrawalReason::StoppedProgram
    }

    /// Age in years on day `d` (fractional), from the birth date when known. For the terms of
    /// a regression equation in age (Mifflin–St Jeor, Harris–Benedict, Jackson 2002): a
    /// continuous predictor, with no step on a birthday.
    pub fn age_on(&self, d: NaiveDate) -> f64 {
        match self.birth_date {
            Some(b) => (d - b).num_days() as f64 / 365.2425,
            None => self.age_years + (d - self.enrolled).num_days() as f64 / 365.2425,
        }
    }

    /// Age in whole completed years on day `d`, for every age cut-off (70 for older adults,
    /// an equation's age bands): by the calendar from the birth date, so a birthday is reached
    /// on its day and not before (`age_on` is days / 365.2425, which put someone born on
    /// 1955-07-01 at 70.00007 on 2025-06-30, the day before their 70th birthday); without one,
    /// the age given at enrolment (whole, or floored) plus the anniversaries of enrolment.
    pub fn whole_years_on(&self, d: NaiveDate) -> f64 {
        match self.birth_date {
            Some(b) => f64::from(whole_years(b, d)),
            None => (self.age_years + f64::from(whole_years(self.enrolled, d))).floor(),
        }
    }
}

/// Whole years from `from` to `to` by the calendar: one more on each anniversary of `from`
/// (of 29 February, on 1 March in a common year); negative when `to` is before `from`.
pub fn whole_years(from: NaiveDate, to: NaiveDate) -> i32 {
    let mut y = to.year() - from.year();
    if (to.month(), to.day()) < (from.month(), from.day()) {
        y -= 1;
    }
    y
}

/// One weigh-in.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct WeighIn {
    /// Day of the weigh-in.
    pub date: NaiveDate,
    /// Time of day as written (`HH:MM`), when given.
    pub time: Option<String>,
    /// Body weight.
    pub weight: Mass,
    /// Where it came from (`home-scale`, `clinic`, …), when given.
    pub source: Option<String>,
}

/// Logged intake for one day (several rows a day are summed by the loader).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IntakeDay {
    /// Day.
    pub date: NaiveDate,
    /// Energy, kcal.
    pub kcal: f64,
    /// Carbohydrate, g.
    pub carbs_g: Option<f64>,
    /// Fat, g.
    pub fat_g: Option<f64>,
    /// Protein, g.
    pub protein_g: Option<f64>,
    /// Free sugars, g.
    pub free_sugars_g: Option<f64>,
}

/// Intensity class of an activity by its MET value (2018 US Physical Activity Guidelines).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Intensity {
    /// Below 3.0 MET.
    Light,
    /// 3.0 to below 6.0 MET.
    Moderate,
    /// 6.0 MET or more.
    Vigorous,
}

impl Intensity {
    /// Class of a MET value: light < 3.0 ≤ moderate < 6.0 ≤ vigorous
    /// (2018 Physical Activity Guidelines for Americans, 2nd ed.).
    pub fn of_met(met: f64) -> Self {
        if met >= 6.0 {
            Intensity::Vigorous
        } else if met >= 3.0 {
            Intensity::Moderate
        } else {
            Intensity::Light
        }
    }
}

/// One logged activity.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ActivityEntry {
    /// Day.
    pub date: NaiveDate,
    /// The activity code or label as written.
    pub activity: String,
    /// Minutes.
    pub minutes: f64,
    /// MET value used (from the activity table, or as given in the file).
    pub met: f64,
    /// Where the MET value came from, e.g. `Compendium 2011 code 17190` or `given in file`.
    pub met_source: String,
    /// Steps, when given.
    pub steps: Option<f64>,
}

impl ActivityEntry {
    /// Intensity class of this entry.
    pub fn intensity(&self) -> Intensity {
        Intensity::of_met(self.met)
    }
}

/// One group session offered, and whether the participant attended.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SessionRecord {
    /// Day.
    pub date: NaiveDate,
    /// Session name or number as written.
    pub session: String,
    /// Attended?
    pub attended: bool,
}

/// A laboratory test or body measure, in its canonical unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum LabTest {
    /// Fasting plasma glucose, canonical unit mmol/L.
    FastingGlucose,
    /// HbA1c, canonical unit % (NGSP).
    Hba1c,
    /// Waist circumference, canonical unit cm.
    Waist,
    /// Systolic blood pressure, mmHg.
    SystolicBp,
    /// Diastolic blood pressure, mmHg.
    DiastolicBp,
    /// Estimated glomerular filtration rate (kidney function), canonical unit mL/min/1.73 m².
    Egfr,
}

impl LabTest {
    /// The canonical unit values are held in.
    pub fn canonical_unit(self) -> &'static str {
        match self {
            LabTest::FastingGlucose => "mmol/L",
            LabTest::Hba1c => "%",
            LabTest::Waist => "cm",
            LabTest::SystolicBp | LabTest::DiastolicBp => "mmHg",
            LabTest::Egfr => "mL/min/1.73 m²",
        }
    }
}

/// One lab result, converted to the canonical unit of its test.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LabResult {
    /// Day of the sample or measurement.
    pub date: NaiveDate,
    /// Which test.
    pub test: LabTest,
    /// Value in [`LabTest::canonical_unit`].
    pub value: f64,
    /// The unit the file used (for display next to the original value).
    pub unit_as_written: String,
    /// The value as written in the file.
    pub value_as_written: f64,
    /// Set when the laboratory reported only a bound (`>14.0`, `<5.0`: a value beyond the
    /// assay's range): `value` and `value_as_written` are then that bound, not a measurement,
    /// and must not be used where an exact number is needed. Absent (not `null`) in the external
    /// protocol's JSON when the value is exact.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub censored: Option<Censor>,
}

/// Which side of its bound a censored lab value lies on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub enum Censor {
    /// `>`: above the bound.
    #[serde(rename = ">")]
    Above,
    /// `>=` (or `≥`): at or above the bound.
    #[serde(rename = ">=")]
    AtLeast,
    /// `<`: below the bound.
    #[serde(rename = "<")]
    Below,
    /// `<=` (or `≤`): at or below the bound.
    #[serde(rename = "<=")]
    AtMost,
}

impl Censor {
    /// The qualifier as printed: `>`, `>=`, `<` or `<=`.
    pub fn symbol(self) -> &'static str {
        match self {
            Censor::Above => ">",
            Censor::AtLeast => ">=",
            Censor::Below => "<",
            Censor::AtMost => "<=",
        }
    }

    /// Reads a qualifier as [`Censor::symbol`] prints it (also `≥` and `≤`).
    pub fn from_symbol(s: &str) -> Option<Censor> {
        Some(match s {
            ">" => Censor::Above,
            ">=" | "≥" => Censor::AtLeast,
            "<" => Censor::Below,
            "<=" | "≤" => Censor::AtMost,
            _ => return None,
        })
    }
}

/// One participant's checked data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ParticipantData {
    /// Profile.
    pub profile: Profile,
    /// Weigh-ins, sorted by date then time.
    pub weights: Vec<WeighIn>,
    /// Daily intake, one entry per logged day, sorted.
    pub intake: Vec<IntakeDay>,
    /// Activities, sorted by date.
    pub activity: Vec<ActivityEntry>,
    /// Sessions, sorted by date.
    pub sessions: Vec<SessionRecord>,
    /// Lab results, sorted by date.
    pub labs: Vec<LabResult>,
}

impl ParticipantData {
    /// Baseline weight: the first weigh-in on or after enrolment (the loader has already dropped
    /// weigh-ins before enrolment), or `None` without weigh-ins.
    pub fn baseline_weight(&self) -> Option<&WeighIn> {
        self.weights.first()
    }

    /// Body-mass index for `weight` at this participant's height, kg/m².
    pub fn bmi(&self, weight: crate::units::Mass) -> f64 {
        let m = self.profile.height.m();
        weight.kg() / (m * m)
    }
}

#[cfg(test)]
mod age_tests {
    use super::*;

    fn d(s: &str) -> NaiveDate {
        NaiveDate::parse_from_str(s, "%Y-%m-%d").unwrap()
    }

    /// Whole completed years by the calendar: the fractional age (days / 365.2425) reached 70
    /// on the eve of the 70th birthday for a span with 18 leap days.
    #[test]
    fn whole_years_turn_on_the_birthday() {
        let mut p = crate::fixture::participant().profile;
        p.birth_date = Some(d("1955-07-01"));
        assert!(p.age_on(d("2025-06-30")) >= 70.0);
        assert_eq!(p.whole_years_on(d("2025-06-30")), 69.0);
        assert_eq!(p.whole_years_on(d("2025-07-01")), 70.0);
        // Born on 29 February: a year older on 1 March in a common year.
        p.birth_date = Some(d("1956-02-29"));
        assert_eq!(p.whole_years_on(d("2026-02-28")), 69.0);
        assert_eq!(p.whole_years_on(d("2026-03-01")), 70.0);
        // Without a birth date: the age at enrolment plus the anniversaries of enrolment.
        p.birth_date = None;
        p.age_years = 69.0;
        p.enrolled = d("2025-04-01");
        assert_eq!(p.whole_years_on(d("2026-03-31")), 69.0);
        assert_eq!(p.whole_years_on(d("2026-04-01")), 70.0);
    }
}

//! Static energy equations: resting energy, activity energy from MET values, and a first
//! estimate of body fat from BMI.
//!
//! Conventions (the same for every function here, so callers cannot mix them up): weight in kg,
//! height in **cm** (the Henry equations use metres internally and convert), age in years,
//! energy in kcal/d.

use cohortpress_metric_api::Sex;

/// Resting energy equation chosen with the module's `equation` setting.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum RestingEquation {
    /// Mifflin–St Jeor 1990, integer-coefficient form (the default).
    MifflinStJeor,
    /// Harris–Benedict as revised by Roza & Shizgal 1984.
    HarrisBenedictRevised,
    /// Katch–McArdle (370 + 21.6·LBM); needs a body-fat value.
    KatchMcArdle,
    /// Cunningham 1980 (500 + 22·LBM); needs a body-fat value.
    Cunningham,
    /// Henry 2005 ("Oxford") weight-and-height equations.
    Henry,
}

impl RestingEquation {
    /// All equations, in the order the setting lists them.
    pub const ALL: [RestingEquation; 5] = [
        RestingEquation::MifflinStJeor,
        RestingEquation::HarrisBenedictRevised,
        RestingEquation::KatchMcArdle,
        RestingEquation::Cunningham,
        RestingEquation::Henry,
    ];

    /// The setting value / text output code of this equation.
    pub fn code(self) -> &'static str {
        match self {
            RestingEquation::MifflinStJeor => "mifflin_st_jeor",
            RestingEquation::HarrisBenedictRevised => "harris_benedict_revised",
            RestingEquation::KatchMcArdle => "katch_mcardle",
            RestingEquation::Cunningham => "cunningham",
            RestingEquation::Henry => "henry",
        }
    }

    /// Human label with the source.
    pub fn label(self) -> &'static str {
        match self {
            RestingEquation::MifflinStJeor => "Mifflin–St Jeor (1990)",
            RestingEquation::HarrisBenedictRevised => {
                "Harris–Benedict, Roza & Shizgal revision (1984)"
            }
            RestingEquation::KatchMcArdle => "Katch–McArdle (lean body mass)",
            RestingEquation::Cunningham => "Cunningham (1980, lean body mass)",
            RestingEquation::Henry => "Henry / Oxford (2005)",
        }
    }

    /// Parses a setting value.
    pub fn from_code(code: &str) -> Option<Self> {
        Self::ALL.into_iter().find(|e| e.code() == code)
    }

    /// The age this equation reads on day `d`: whole completed years for Henry's age bands
    /// (an age cut-off: 30 is reached on the 30th birthday, where days / 365.2425 gives 29.9993
    /// for a 30-year span with 7 leap days), fractional years for the equations with
    /// an age term (Mifflin–St Jeor, Harris–Benedict: a regression on age as a continuous
    /// predictor, so no step of 5 kcal/d on a birthday; whole years would also bias the term by
    /// half a year on average).
    pub fn age_on(self, profile: &cohortpress_metric_api::Profile, d: chrono::NaiveDate) -> f64 {
        match self {
            RestingEquation::Henry => profile.whole_years_on(d),
            _ => profile.age_on(d),
        }
    }

    /// Whether the equation needs lean body mass (and so a body-fat value).
    pub fn needs_lean_mass(self) -> bool {
        matches!(
            self,
            RestingEquation::KatchMcArdle | RestingEquation::Cunningham
        )
    }

    /// Resting energy, kcal/d. `lean_kg` is used only by the lean-mass equations; when they get
    /// `None` the caller must have chosen another equation (this function then falls back to
    /// Mifflin–St Jeor rather than inventing a lean mass).
    pub fn resting_energy(
        self,
        sex: Sex,
        weight_kg: f64,
        height_cm: f64,
        age_years: f64,
        lean_kg: Option<f64>,
    ) -> f64 {
        match (self, lean_kg) {
            (RestingEquation::MifflinStJeor, _) => {
                mifflin_st_jeor(sex, weight_kg, height_cm, age_years)
            }
            (RestingEquation::HarrisBenedictRevised, _) => {
                harris_benedict_revised(sex, weight_kg, height_cm, age_years)
            }
            (RestingEquation::KatchMcArdle, Some(l)) => katch_mcardle(l),
            (RestingEquation::Cunningham, Some(l)) => cunningham(l),
            (RestingEquation::Henry, _) => henry(sex, weight_kg, height_cm, age_years),
            (_, None) => mifflin_st_jeor(sex, weight_kg, height_cm, age_years),
        }
    }
}

/// Resting energy expenditure by Mifflin–St Jeor, kcal/d.
///
/// # Formula
/// Mifflin MD, St Jeor ST, et al. *Am J Clin Nutr* 1990;51:241–247, integer-coefficient form:
///
/// - men:   REE = 10·W + 6.25·H − 5·A + 5
/// - women: REE = 10·W + 6.25·H − 5·A − 161
///
/// W kg, H cm, A years. (The paper's unrounded 9.99/6.25/4.92 form differs by up to ~10 kcal/d;
/// this crate uses the integer form throughout.)
pub fn mifflin_st_jeor(sex: Sex, weight_kg: f64, height_cm: f64, age_years: f64) -> f64 {
    let s = match sex {
        Sex::Male => 5.0,
        Sex::Female => -161.0,
    };
    10.0 * weight_kg + 6.25 * height_cm - 5.0 * age_years + s
}

/// Resting energy by the Harris–Benedict equations as revised by Roza & Shizgal, kcal/d.
///
/// # Formula
/// Roza AM, Shizgal HM. *Am J Clin Nutr* 1984;40:168–182:
///
/// - men:   88.362 + 13.397·W + 4.799·H − 5.677·A
/// - women: 447.593 + 9.247·W + 3.098·H − 4.330·A
pub fn harris_benedict_revised(sex: Sex, weight_kg: f64, height_cm: f64, age_years: f64) -> f64 {
    match sex {
        Sex::Male => 88.362 + 13.397 * weight_kg + 4.799 * height_cm - 5.677 * age_years,
        Sex::Female => 447.593 + 9.247 * weight_kg + 3.098 * height_cm - 4.330 * age_years,
    }
}

/// Resting energy from lean body mass, Katch–McArdle form, kcal/d.
///
/// # Formula
/// RMR = 370 + 21.6·LBM (LBM in kg, never pounds). The form is that of Cunningham's 1991
/// review (*Am J Clin Nutr* 1991;54:963–969); the Katch–McArdle textbook attribution is
/// customary (from memory).
pub fn katch_mcardle(lean_kg: f64) -> f64 {
    370.0 + 21.6 * lean_kg
}

/// Resting energy from lean body mass, Cunningham 1980, kcal/d.
///
/// # Formula
/// RMR = 500 + 22·LBM (kg). Cunningham JJ. *Am J Clin Nutr* 1980;33:2372–2374 (the form is a
/// secondary transcription; citation details from memory).
pub fn cunningham(lean_kg: f64) -> f64 {
    500.0 + 22.0 * lean_kg
}

/// Basal metabolic rate by the Henry ("Oxford") weight-and-height equations, kcal/d.
///
/// # Formula
/// Henry CJK. *Public Health Nutr* 2005;8(7A):1133–1152; Hm = height in metres
/// (`height_cm / 100`). Age bands are half-open: [0, 3), [3, 10), [10, 18), [18, 30),
/// [30, 60), [60, ∞).
///
/// | Age | Men | Women |
/// |---|---|---|
/// | 18–30 | 14.4W + 313Hm + 113 | 10.4W + 615Hm − 282 |
/// | 30–60 | 11.4W + 541Hm − 137 | 8.18W + 502Hm − 11.6 |
/// | ≥60 | 11.4W + 541Hm − 256 | 8.52W + 421Hm + 10.7 |
/// | 10–18 | 15.6W + 266Hm + 299 | 9.40W + 249Hm + 462 |
/// | 3–10 | 15.1W + 74.2Hm + 306 | 15.9W + 210Hm + 349 |
/// | 0–3 | 28.2W + 859Hm − 371 | 30.4W + 703Hm − 287 |
///
/// The coefficients are a secondary transcription; the 10–18 men's constant (+299) conflicts
/// with another transcription (+65), so results for adolescents are not relied on.
pub fn henry(sex: Sex, weight_kg: f64, height_cm: f64, age_years: f64) -> f64 {
    let hm = height_cm / 100.0;
    let (a, b, c) = match (sex, age_years) {
        (Sex::Male, a) if a < 3.0 => (28.2, 859.0, -371.0),
        (Sex::Male, a) if a < 10.0 => (15.1, 74.2, 306.0),
        (Sex::Male, a) if a < 18.0 => (15.6, 266.0, 299.0),
        (Sex::Male, a) if a < 30.0 => (14.4, 313.0, 113.0),
        (Sex::Male, a) if a < 60.0 => (11.4, 541.0, -137.0),
        (Sex::Male, _) => (11.4, 541.0, -256.0),
        (Sex::Female, a) if a < 3.0 => (30.4, 703.0, -287.0),
        (Sex::Female, a) if a < 10.0 => (15.9, 210.0, 349.0),
        (Sex::Female, a) if a < 18.0 => (9.40, 249.0, 462.0),
        (Sex::Female, a) if a < 30.0 => (10.4, 615.0, -282.0),
        (Sex::Female, a) if a < 60.0 => (8.18, 502.0, -11.6),
        (Sex::Female, _) => (8.52, 421.0, 10.7),
    };
    a * weight_kg + b * hm + c
}

/// Percent body fat estimated from BMI, age and sex (Jackson et al. 2002, log-BMI form).
///
/// # Formula
/// Jackson AS, Stanforth PR, Gagnon J, et al. *Int J Obes* 2002;26:789–796:
///
/// - men:   BF% = 0.14·A + 37.31·ln(BMI) − 103.94
/// - women: BF% = 0.14·A + 39.96·ln(BMI) − 102.01
///
/// This is the equation that seeds the dynamic model when no measured body fat is given.
pub fn jackson_2002_body_fat(sex: Sex, bmi: f64, age_years: f64) -> f64 {
    match sex {
        Sex::Male => 0.14 * age_years + 37.31 * bmi.ln() - 103.94,
        Sex::Female => 0.14 * age_years + 39.96 * bmi.ln() - 102.01,
    }
}

/// Gross energy of an activity, kcal.
///
/// # Formula
/// kcal = MET × W × hours, with 1 MET taken as 1 kcal·kg⁻¹·h⁻¹ (Ainsworth et al. 2011,
/// *Med Sci Sports Exerc* 43:1575, definition of the MET).
pub fn activity_kcal_gross(met: f64, weight_kg: f64, hours: f64) -> f64 {
    met * weight_kg * hours
}

/// Energy of an activity net of resting, kcal: what the activity adds on top of a total that
/// already counts resting expenditure for the same minutes.
///
/// # Formula
/// kcal = (MET − 1) × W × hours (same MET convention as [`activity_kcal_gross`]). Values of MET
/// below 1 (e.g. sleeping, 0.95) give 0: logging rest never lowers expenditure here.
pub fn activity_kcal_net(met: f64, weight_kg: f64, hours: f64) -> f64 {
    (met - 1.0).max(0.0) * weight_kg * hours
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_abs_diff_eq;

    #[test]
    fn equation_codes_round_trip() {
        for e in RestingEquation::ALL {
            assert_eq!(RestingEquation::from_code(e.code()), Some(e));
        }
        assert_eq!(RestingEquation::from_code("guess"), None);
    }

    #[test]
    fn lean_mass_equations_without_lean_mass_fall_back_to_mifflin() {
        let m = mifflin_st_jeor(Sex::Female, 70.0, 160.0, 50.0);
        let k = RestingEquation::KatchMcArdle.resting_energy(Sex::Female, 70.0, 160.0, 50.0, None);
        assert_abs_diff_eq!(k, m, epsilon = 1e-9);
        let k = RestingEquation::KatchMcArdle.resting_energy(
            Sex::Female,
            70.0,
            160.0,
            50.0,
            Some(40.0),
        );
        assert_abs_diff_eq!(k, 370.0 + 21.6 * 40.0, epsilon = 1e-9);
    }

    #[test]
    fn henry_band_edges_are_half_open() {
        // 30.0 belongs to the 30–60 band, 29.99 to 18–30.
        let at30 = henry(Sex::Male, 80.0, 180.0, 30.0);
        assert_abs_diff_eq!(at30, 11.4 * 80.0 + 541.0 * 1.8 - 137.0, epsilon = 1e-9);
        let below = henry(Sex::Male, 80.0, 180.0, 29.99);
        assert_abs_diff_eq!(below, 14.4 * 80.0 + 313.0 * 1.8 + 113.0, epsilon = 1e-9);
    }

    /// Henry's bands are age cut-offs: 30 is reached on the 30th birthday. Days / 365.2425 put
    /// someone born 1997-03-05 at 29.9993 on 2027-03-05, their 30th birthday (a 30-year span
    /// with 7 leap days), still in the 18–30 band; the equations with an age term keep the
    /// fractional age.
    #[test]
    fn henry_reads_whole_years_and_the_age_term_equations_fractional_ones() {
        let mut p = cohortpress_metric_api::fixture::participant().profile;
        p.birth_date = chrono::NaiveDate::from_ymd_opt(1997, 3, 5);
        let birthday = chrono::NaiveDate::from_ymd_opt(2027, 3, 5).unwrap();
        assert!(p.age_on(birthday) < 30.0);
        assert_eq!(RestingEquation::Henry.age_on(&p, birthday), 30.0);
        assert_eq!(
            RestingEquation::MifflinStJeor.age_on(&p, birthday),
            p.age_on(birthday)
        );
        let age = RestingEquation::Henry.age_on(&p, birthday);
        let r = RestingEquation::Henry.resting_energy(Sex::Male, 80.0, 180.0, age, None);
        assert_abs_diff_eq!(r, 11.4 * 80.0 + 541.0 * 1.8 - 137.0, epsilon = 1e-9);
    }

    #[test]
    fn net_activity_is_never_negative() {
        assert_eq!(activity_kcal_net(0.95, 80.0, 8.0), 0.0);
        assert!(activity_kcal_gross(0.95, 80.0, 8.0) > 0.0);
    }
}

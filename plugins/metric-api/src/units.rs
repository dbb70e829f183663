//! Quantities held in one unit system, with exact conversions from what people write.
//!
//! Exact factors: 1 lb = 0.45359237 kg and 1 in = 2.54 cm (international yard and pound
//! agreement, 1959). Glucose: mg/dL ÷ 18.016 = mmol/L (molar mass of glucose 180.16 g/mol).
//! HbA1c: IFCC (mmol/mol) = 10.93 × NGSP (%) − 23.50 (NGSP/IFCC master equation, Hoelzel et al.
//! 2004, Clin Chem 50:166).

use serde::{Deserialize, Serialize};

/// Kilograms per pound, exact (international yard and pound agreement, 1959).
pub const KG_PER_LB: f64 = 0.453_592_37;
/// Centimetres per inch, exact (international yard and pound agreement, 1959).
pub const CM_PER_IN: f64 = 2.54;
/// mg/dL per mmol/L of glucose (molar mass 180.16 g/mol ÷ 10).
pub const GLUCOSE_MGDL_PER_MMOLL: f64 = 18.016;

/// A body mass. Held in kilograms; construct with [`Mass::from_kg`] or [`Mass::from_lb`].
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(transparent)]
pub struct Mass(f64);

impl Mass {
    /// From kilograms.
    pub fn from_kg(kg: f64) -> Self {
        Mass(kg)
    }
    /// From pounds (exact factor).
    pub fn from_lb(lb: f64) -> Self {
        Mass(lb * KG_PER_LB)
    }
    /// In kilograms.
    pub fn kg(self) -> f64 {
        self.0
    }
    /// In pounds.
    pub fn lb(self) -> f64 {
        self.0 / KG_PER_LB
    }
}

/// A length (height, waist). Held in centimetres.
#[derive(Debug, Clone, Copy, PartialEq, PartialOrd, Serialize, Deserialize)]
#[serde(transparent)]
pub struct Length(f64);

impl Length {
    /// From centimetres.
    pub fn from_cm(cm: f64) -> Self {
        Length(cm)
    }
    /// From inches (exact factor).
    pub fn from_in(inches: f64) -> Self {
        Length(inches * CM_PER_IN)
    }
    /// From feet and inches.
    pub fn from_ft_in(ft: f64, inches: f64) -> Self {
        Length::from_in(ft * 12.0 + inches)
    }
    /// In centimetres.
    pub fn cm(self) -> f64 {
        self.0
    }
    /// In metres.
    pub fn m(self) -> f64 {
        self.0 / 100.0
    }
    /// In inches.
    pub fn inches(self) -> f64 {
        self.0 / CM_PER_IN
    }
}

/// Glucose mg/dL → mmol/L.
pub fn glucose_mgdl_to_mmoll(mgdl: f64) -> f64 {
    mgdl / GLUCOSE_MGDL_PER_MMOLL
}

/// Glucose mmol/L → mg/dL.
pub fn glucose_mmoll_to_mgdl(mmoll: f64) -> f64 {
    mmoll * GLUCOSE_MGDL_PER_MMOLL
}

/// HbA1c NGSP % → IFCC mmol/mol (Hoelzel et al. 2004, Clin Chem 50:166).
pub fn hba1c_percent_to_mmolmol(percent: f64) -> f64 {
    10.93 * percent - 23.50
}

/// HbA1c IFCC mmol/mol → NGSP % (Hoelzel et al. 2004, Clin Chem 50:166).
pub fn hba1c_mmolmol_to_percent(mmolmol: f64) -> f64 {
    0.09148 * mmolmol + 2.152
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn pound_and_inch_are_exact() {
        // International yard and pound agreement, 1959.
        assert_eq!(Mass::from_lb(1.0).kg(), 0.45359237);
        assert_eq!(Length::from_in(1.0).cm(), 2.54);
        assert!((Length::from_ft_in(5.0, 6.0).cm() - 167.64).abs() < 1e-9);
        assert!((Mass::from_kg(100.0).lb() - 220.462_262_2).abs() < 1e-6);
    }

    #[test]
    fn glucose_conversion_matches_ada_table() {
        // ADA Standards of Care, Section 2: 126 mg/dL = 7.0 mmol/L, 100 = 5.6, 200 = 11.1.
        assert!((glucose_mgdl_to_mmoll(126.0) - 6.99).abs() < 0.01);
        assert!((glucose_mgdl_to_mmoll(100.0) - 5.55).abs() < 0.01);
        assert!((glucose_mgdl_to_mmoll(200.0) - 11.10).abs() < 0.01);
    }

    #[test]
    fn hba1c_conversion_matches_master_equation() {
        // Hoelzel et al. 2004, Clin Chem 50:166: 6.5 % = 48 mmol/mol, 7.0 % = 53 mmol/mol.
        assert!((hba1c_percent_to_mmolmol(6.5) - 47.55).abs() < 0.05);
        assert!((hba1c_percent_to_mmolmol(7.0) - 53.01).abs() < 0.05);
        assert!((hba1c_mmolmol_to_percent(53.0) - 7.000).abs() < 0.01);
    }
}

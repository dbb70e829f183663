//! LOINC codes (system `http://loinc.org`) read by `import fhir` and, as a lab row's `test`,
//! in `labs.csv`; each confirmed against published FHIR material:
//! - 29463-7 Body weight — FHIR R4 `observation-example` (id `example`, 185 `[lb_av]`).
//! - 3141-9 Body weight Measured — the same R4 example codes it beside 29463-7, and the DSTU 1
//!   and DSTU 2 versions of that example (hl7.org/fhir/DSTU1/observation-example.json.html)
//!   code the weight with it alone, as systems built on them still export it.
//! - 8302-2 Body height — Vital Signs IG STU1 (hl7.org/fhir/us/vitals/STU1), `height-example`.
//! - 8280-0 Waist circumference at umbilicus by tape measure — vital-signs Observation examples
//!   of the HL7 Europe discharge-report IG (build.fhir.org/ig/hl7-eu/discharge-report).
//! - 85354-9 Blood pressure panel with components 8480-6 systolic and 8462-4 diastolic — FHIR R4
//!   value set `observation-vitalsignresult` (hl7.org/fhir/R4/valueset-observation-vitalsignresult.html).
//! - 4548-4 Hemoglobin A1c/Hemoglobin.total in Blood (UCUM `%`) — HL7 BSeR IG and HL7 Vulcan
//!   schedule IG examples.
//! - 1558-6 Fasting glucose [Mass/volume] in Serum or Plasma, and 14771-0 Fasting glucose
//!   [Moles/volume] in Serum or Plasma — the CH EPREG IG example (14771-0) and LOINC code
//!   listings (1558-6).
//! - 59261-8 Hemoglobin A1c/Hemoglobin.total in Blood by IFCC protocol (mmol/mol) — from a
//!   LOINC code listing (third-party), marked here as not confirmed in HL7 material.
//! - Glomerular filtration rate/1.73 sq M.predicted (eGFR, mL/min/1.73 m²): 33914-3 (by the
//!   MDRD formula), 62238-1 (CKD-EPI), 98979-8 (CKD-EPI 2021, without race), 48642-3 and
//!   48643-1 (the race-specific MDRD results), 88293-6 and 88294-4 (the race-specific CKD-EPI
//!   results) — from LOINC code listings and laboratory code tables (third-party), not
//!   confirmed in HL7 material.

/// LOINC system URI.
pub const LOINC: &str = "http://loinc.org";
/// Body weight.
pub const BODY_WEIGHT: &str = "29463-7";
/// Body weight, measured (read as body weight).
pub const BODY_WEIGHT_MEASURED: &str = "3141-9";
/// Body height.
pub const BODY_HEIGHT: &str = "8302-2";
/// Waist circumference.
pub const WAIST: &str = "8280-0";
/// Blood pressure panel.
pub const BP_PANEL: &str = "85354-9";
/// Systolic blood pressure (component of the panel).
pub const SYSTOLIC: &str = "8480-6";
/// Diastolic blood pressure (component of the panel).
pub const DIASTOLIC: &str = "8462-4";
/// HbA1c, % (NGSP/DCCT).
pub const HBA1C: &str = "4548-4";
/// HbA1c, mmol/mol (IFCC); not confirmed in HL7 material (see the module documentation).
pub const HBA1C_IFCC: &str = "59261-8";
/// Fasting glucose, mass per volume.
pub const FASTING_GLUCOSE_MASS: &str = "1558-6";
/// Fasting glucose, moles per volume.
pub const FASTING_GLUCOSE_MOLES: &str = "14771-0";
/// eGFR by creatinine, each formula's code (see the module documentation); not confirmed in
/// HL7 material.
pub const EGFR: [&str; 7] = [
    "33914-3", "62238-1", "98979-8", "48642-3", "48643-1", "88293-6", "88294-4",
];

//! The typed view of the `outcomes` module's output: what the module writes and what reports
//! read, under one set of names.

use crate::OutcomesModule;
use chrono::NaiveDate;
use cohortpress_metric_api::view::{
    Interval, ModuleView, OutputReader, OutputWriter, RowReader, TableRow, TypedFlag, ViewError,
    cell,
};
use cohortpress_metric_api::{Cell, Censor, LabTest, MetricModule, ModuleSpec, code_enum};

/// Output names of the `outcomes` module.
pub mod names {
    /// Starting weight (scalar, kg).
    pub const BASELINE_WEIGHT_KG: &str = "baseline_weight_kg";
    /// Current weight, with the trend's interval when it comes from the trend (scalar, kg).
    pub const CURRENT_WEIGHT_KG: &str = "current_weight_kg";
    /// Current minus starting weight (scalar, kg).
    pub const CHANGE_KG: &str = "change_kg";
    /// Change in % of the starting weight (scalar, %).
    pub const CHANGE_PERCENT: &str = "change_percent";
    /// Starting BMI (scalar, kg/m2).
    pub const BMI_BASELINE_KG_M2: &str = "bmi_baseline_kg_m2";
    /// Current BMI (scalar, kg/m2).
    pub const BMI_CURRENT_KG_M2: &str = "bmi_current_kg_m2";
    /// BMI change (scalar, kg/m2).
    pub const BMI_CHANGE_KG_M2: &str = "bmi_change_kg_m2";
    /// Rate of change per week (scalar, kg/wk).
    pub const RATE_KG_PER_WEEK: &str = "rate_kg_per_week";
    /// Largest loss so far (scalar, %).
    pub const MAX_LOSS_PERCENT: &str = "max_loss_percent";
    /// [`super::BmiCategory`] at the start (text).
    pub const BMI_CATEGORY_BASELINE: &str = "bmi_category_baseline";
    /// [`super::BmiCategory`] now (text).
    pub const BMI_CATEGORY_CURRENT: &str = "bmi_category_current";
    /// [`super::WeightChangeCategory`] (text).
    pub const WEIGHT_CHANGE_CATEGORY: &str = "weight_change_category";
    /// [`super::CurrentWeightSource`] (text).
    pub const CURRENT_WEIGHT_SOURCE: &str = "current_weight_source";
    /// Weight-loss milestones (table of [`super::MilestoneRow`]).
    pub const MILESTONES: &str = "milestones";
    /// Lab results and measurements (table of [`super::LabRow`]).
    pub const LABS: &str = "labs";
    /// Change from baseline by week since enrolment (table of [`super::TrajectoryRow`]).
    pub const TRAJECTORY: &str = "trajectory";
}

code_enum! {
    /// WHO adult BMI class (WHO TRS 894, 2000).
    pub enum BmiCategory {
        /// Below 18.5.
        Underweight = "underweight" => "underweight",
        /// 18.5 to under 25.
        Normal = "normal" => "normal weight",
        /// 25 to under 30 (pre-obese).
        Overweight = "overweight" => "overweight (pre-obese)",
        /// 30 to under 35.
        ObesityClass1 = "obesity_class_1" => "obesity class I",
        /// 35 to under 40.
        ObesityClass2 = "obesity_class_2" => "obesity class II",
        /// 40 or more.
        ObesityClass3 = "obesity_class_3" => "obesity class III",
    }
}

code_enum! {
    /// Weight change in % of baseline.
    pub enum WeightChangeCategory {
        /// Gain of 3 % or more.
        Gain3OrMore = "gain_3_or_more" => "gain of 3 % or more",
        /// Within ±3 %.
        Stable = "stable" => "stable (within 3 %)",
        /// Loss of 3 % to under 5 %.
        Loss3To5 = "loss_3_to_5" => "loss of 3 % to under 5 %",
        /// Loss of 5 % to under 7 %.
        Loss5To7 = "loss_5_to_7" => "loss of 5 % to under 7 %",
        /// Loss of 7 % to under 10 %.
        Loss7To10 = "loss_7_to_10" => "loss of 7 % to under 10 %",
        /// Loss of 10 % or more.
        Loss10OrMore = "loss_10_or_more" => "loss of 10 % or more",
    }
}

code_enum! {
    /// Where the current weight comes from.
    pub enum CurrentWeightSource {
        /// The trend module's current trend weight.
        Trend = "trend" => "weight trend",
        /// The last weigh-in day (no trend).
        WeighIns = "weigh_ins" => "last weigh-in",
    }
}

code_enum! {
    /// Category of one lab result.
    pub enum LabCategory {
        /// Glycaemia in the normal range.
        Normal = "normal" => "normal range",
        /// Fasting glucose below 70 mg/dL (3.9 mmol/L), the level of hypoglycaemia.
        BelowNormalRange = "below_normal_range" => "below 70 mg/dL (3.9 mmol/L), the level counted as low blood sugar (hypoglycaemia)",
        /// Glycaemia in the prediabetes range.
        PrediabetesRange = "prediabetes_range" => "in the prediabetes range",
        /// Glycaemia in the diabetes range.
        DiabetesRange = "diabetes_range" => "in the diabetes range",
        /// Waist: risk not increased.
        NotIncreasedRisk = "not_increased_risk" => "not increased",
        /// Waist: increased risk.
        IncreasedRisk = "increased_risk" => "increased",
        /// Waist: substantially increased risk.
        SubstantiallyIncreasedRisk = "substantially_increased_risk" => "substantially increased",
        /// Recorded, no category (blood pressure).
        Recorded = "recorded" => "recorded",
        /// eGFR 90 or more: KDIGO 2012 category G1.
        EgfrG1 = "egfr_g1" => "normal or high (G1)",
        /// eGFR 60–89: KDIGO G2.
        EgfrG2 = "egfr_g2" => "mildly decreased (G2)",
        /// eGFR 45–59: KDIGO G3a.
        EgfrG3a = "egfr_g3a" => "mildly to moderately decreased (G3a)",
        /// eGFR 30–44: KDIGO G3b.
        EgfrG3b = "egfr_g3b" => "moderately to severely decreased (G3b)",
        /// eGFR 15–29: KDIGO G4.
        EgfrG4 = "egfr_g4" => "severely decreased (G4)",
        /// eGFR below 15: KDIGO G5.
        EgfrG5 = "egfr_g5" => "kidney failure range (G5)",
    }
}

code_enum! {
    /// Flags of the `outcomes` module.
    pub enum OutcomesFlag {
        /// No weigh-in on or after enrolment.
        InsufficientData = "insufficient_data" => "No weigh-in on or after enrolment",
        /// Loss faster than the set limit over the set span.
        FastLoss = "fast_loss" => "Fast loss",
        /// Logged intake below the floor.
        LowIntake = "low_intake" => "Low intake",
        /// Logged intake very low.
        VeryLowIntake = "very_low_intake" => "Very low logged intake",
        /// BMI below 18.5.
        LowBmi = "low_bmi" => "Low BMI",
        /// Latest glycaemia result in the diabetes range.
        LabDiabetesRange = "lab_diabetes_range" => "Lab result in the diabetes range",
        /// Latest glycaemia result in the prediabetes range.
        LabPrediabetesRange = "lab_prediabetes_range" => "Lab result in the prediabetes range",
        /// Latest fasting glucose below 70 mg/dL (3.9 mmol/L).
        LabLowGlucose = "lab_low_glucose" => "Fasting glucose below the normal range",
        /// Latest blood pressure above 180 mmHg systolic or 120 mmHg diastolic.
        LabSevereBp = "lab_severe_bp" => "Blood pressure above 180/120 mmHg",
        /// Latest eGFR 30–59 mL/min/1.73 m² (KDIGO G3a–G3b).
        LabLowEgfr = "lab_low_egfr" => "eGFR below 60 (kidney function)",
        /// Latest eGFR below 30 mL/min/1.73 m² (KDIGO G4–G5).
        LabVeryLowEgfr = "lab_very_low_egfr" => "eGFR below 30 (kidney function)",
        /// Glucose-lowering medication with fast loss or low intake.
        MedicationReview = "medication_review" => "Medication review",
        /// Gain faster than the fast-loss limit over the same span.
        FastGain = "fast_gain" => "Fast gain",
        /// The profile notes a pregnancy.
        Pregnancy = "pregnancy" => "Pregnancy noted in the profile",
        /// The profile notes breastfeeding.
        Breastfeeding = "breastfeeding" => "Breastfeeding noted in the profile",
        /// Intake below resting energy expenditure over the last four weeks, on the weight
        /// trend's evidence (alone, or agreeing with the food log).
        BelowRestingIntake = "below_resting_intake" => "Intake below resting energy for weeks",
    }
}

/// Label of the `milestones` table.
pub const MILESTONES_LABEL: &str = "Weight-loss milestones";
/// Label of the `labs` table.
pub const LABS_LABEL: &str = "Lab results and measurements";

/// Label of the `trajectory` table.
pub const TRAJECTORY_LABEL: &str = "Change from the starting weight by week since enrolment";

/// One row of the `trajectory` table: the trend weight on the last day of one week counted
/// from enrolment (days 0–6 are week 0), and its change from the starting weight. The group
/// report's trajectory is the mean of these rows by week.
#[derive(Debug, Clone, PartialEq)]
pub struct TrajectoryRow {
    /// Week since enrolment, from 0 (the enrolment week).
    pub week: u32,
    /// The week's last day (enrolment + 7·week + 6 days), the day the weight is taken.
    pub date: NaiveDate,
    /// Trend weight that day, kg.
    pub weight_kg: f64,
    /// Change from the starting weight, % of it (negative = loss).
    pub change_percent: f64,
}

impl TableRow for TrajectoryRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("week", "", "Week since enrolment"),
        ("date", "", "Week's last day"),
        ("weight_kg", "kg", "Trend weight"),
        ("change_percent", "%", "Change from the starting weight"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        let week = r.required("week", r.number("week")?)?;
        Ok(TrajectoryRow {
            week: week as u32,
            date: r.required("date", r.date("date")?)?,
            weight_kg: r.required("weight_kg", r.number("weight_kg")?)?,
            change_percent: r.required("change_percent", r.number("change_percent")?)?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::number(Some(f64::from(self.week))),
            cell::date(Some(self.date)),
            cell::number(Some(self.weight_kg)),
            cell::number(Some(self.change_percent)),
        ]
    }
}

/// One row of the `milestones` table.
#[derive(Debug, Clone, PartialEq)]
pub struct MilestoneRow {
    /// Loss, % of the starting weight.
    pub threshold_percent: f64,
    /// Weight at or below which it is reached, kg.
    pub threshold_weight_kg: Option<f64>,
    /// Reached?
    pub reached: bool,
    /// The first weigh-in day on which the trend was at or below it.
    pub date_reached: Option<NaiveDate>,
}

impl TableRow for MilestoneRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("threshold_percent", "%", "Loss of"),
        ("threshold_weight_kg", "kg", "Weight at or below"),
        ("reached", "", "Reached"),
        ("date_reached", "", "First reached on"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(MilestoneRow {
            threshold_percent: r.required("threshold_percent", r.number("threshold_percent")?)?,
            threshold_weight_kg: r.number("threshold_weight_kg")?,
            reached: r.required("reached", r.yes_no("reached")?)?,
            date_reached: r.date("date_reached")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::number(Some(self.threshold_percent)),
            cell::number(self.threshold_weight_kg),
            cell::yes_no(Some(self.reached)),
            cell::date(self.date_reached),
        ]
    }
}

/// One row of the `labs` table.
#[derive(Debug, Clone, PartialEq)]
pub struct LabRow {
    /// Day of the result.
    pub date: NaiveDate,
    /// Test.
    pub test: LabTest,
    /// Value in the canonical unit.
    pub value: f64,
    /// Canonical unit.
    pub unit: String,
    /// Value in the other unit people use.
    pub value_alt: Option<f64>,
    /// The other unit.
    pub unit_alt: Option<String>,
    /// Category.
    pub category: LabCategory,
    /// Estimated average glucose, mg/dL (HbA1c only).
    pub eag_mg_dl: Option<f64>,
    /// `>`, `>=`, `<` or `<=` when the laboratory reported only a bound (a censored value:
    /// `value` and `value_alt` are that bound, not a measurement, and `eag_mg_dl` is empty).
    pub qualifier: Option<Censor>,
}

impl TableRow for LabRow {
    const COLUMNS: &'static [(&'static str, &'static str, &'static str)] = &[
        ("date", "", "Date"),
        ("test", "", "Test"),
        ("value", "", "Value"),
        ("unit", "", "Unit"),
        ("value_alt", "", "Value (other unit)"),
        ("unit_alt", "", "Other unit"),
        ("category", "", "Category"),
        ("eag_mg_dl", "mg/dL", "Estimated average glucose"),
        ("qualifier", "", "Bound"),
    ];

    fn read(r: &RowReader<'_>) -> Result<Self, ViewError> {
        Ok(LabRow {
            date: r.required("date", r.date("date")?)?,
            test: r.required("test", r.code("test")?)?,
            value: r.required("value", r.number("value")?)?,
            unit: r.text("unit")?.unwrap_or_default().to_string(),
            value_alt: r.number("value_alt")?,
            unit_alt: r.text("unit_alt")?.map(str::to_string),
            category: r.required("category", r.code("category")?)?,
            eag_mg_dl: r.number("eag_mg_dl")?,
            qualifier: r.code("qualifier")?,
        })
    }

    fn write(&self) -> Vec<Cell> {
        vec![
            cell::date(Some(self.date)),
            cell::code(Some(self.test)),
            cell::number(Some(self.value)),
            cell::text(Some(&self.unit)),
            cell::number(self.value_alt),
            cell::text(self.unit_alt.as_deref()),
            cell::code(Some(self.category)),
            cell::number(self.eag_mg_dl),
            cell::code(self.qualifier),
        ]
    }
}

/// Everything the `outcomes` module outputs, typed.
#[derive(Debug, Clone, PartialEq)]
pub struct OutcomesView {
    /// Starting weight, kg.
    pub baseline_weight_kg: Option<f64>,
    /// Current weight, kg (with the trend's interval when from the trend).
    pub current_weight_kg: Interval,
    /// Change since the start, kg.
    pub change_kg: Option<f64>,
    /// Change since the start, % of the starting weight.
    pub change_percent: Option<f64>,
    /// Starting BMI, kg/m².
    pub bmi_baseline_kg_m2: Option<f64>,
    /// Current BMI, kg/m².
    pub bmi_current_kg_m2: Option<f64>,
    /// BMI change, kg/m².
    pub bmi_change_kg_m2: Option<f64>,
    /// Rate of change, kg/wk.
    pub rate_kg_per_week: Option<f64>,
    /// Largest loss so far, %.
    pub max_loss_percent: Option<f64>,
    /// WHO BMI class at the start.
    pub bmi_category_baseline: Option<BmiCategory>,
    /// WHO BMI class now.
    pub bmi_category_current: Option<BmiCategory>,
    /// Weight-change category.
    pub weight_change_category: Option<WeightChangeCategory>,
    /// Where the current weight comes from.
    pub current_weight_source: CurrentWeightSource,
    /// Milestones.
    pub milestones: Vec<MilestoneRow>,
    /// Lab results.
    pub labs: Vec<LabRow>,
    /// Change from the starting weight by week since enrolment.
    pub trajectory: Vec<TrajectoryRow>,
    /// Flags.
    pub flags: Vec<TypedFlag<OutcomesFlag>>,
}

impl ModuleView for OutcomesView {
    const MODULE: &'static str = crate::MODULE_ID;

    fn spec() -> ModuleSpec {
        OutcomesModule.spec()
    }

    fn read(r: &OutputReader<'_>) -> Result<Self, ViewError> {
        use names::*;
        Ok(OutcomesView {
            baseline_weight_kg: r.scalar(BASELINE_WEIGHT_KG)?,
            current_weight_kg: r.interval(CURRENT_WEIGHT_KG)?,
            change_kg: r.scalar(CHANGE_KG)?,
            change_percent: r.scalar(CHANGE_PERCENT)?,
            bmi_baseline_kg_m2: r.scalar(BMI_BASELINE_KG_M2)?,
            bmi_current_kg_m2: r.scalar(BMI_CURRENT_KG_M2)?,
            bmi_change_kg_m2: r.scalar(BMI_CHANGE_KG_M2)?,
            rate_kg_per_week: r.scalar(RATE_KG_PER_WEEK)?,
            max_loss_percent: r.scalar(MAX_LOSS_PERCENT)?,
            bmi_category_baseline: r
                .optional(BMI_CATEGORY_BASELINE, || r.code(BMI_CATEGORY_BASELINE))?,
            bmi_category_current: r
                .optional(BMI_CATEGORY_CURRENT, || r.code(BMI_CATEGORY_CURRENT))?,
            weight_change_category: r
                .optional(WEIGHT_CHANGE_CATEGORY, || r.code(WEIGHT_CHANGE_CATEGORY))?,
            current_weight_source: r.code(CURRENT_WEIGHT_SOURCE)?,
            milestones: r.table(MILESTONES)?,
            labs: r.table(LABS)?,
            trajectory: r.table(TRAJECTORY)?,
            flags: r.flags()?,
        })
    }

    fn write(&self, w: &mut OutputWriter) {
        use names::*;
        w.scalar(BASELINE_WEIGHT_KG, self.baseline_weight_kg);
        w.interval(CURRENT_WEIGHT_KG, self.current_weight_kg);
        w.scalar(CHANGE_KG, self.change_kg);
        w.scalar(CHANGE_PERCENT, self.change_percent);
        w.scalar(BMI_BASELINE_KG_M2, self.bmi_baseline_kg_m2);
        w.scalar(BMI_CURRENT_KG_M2, self.bmi_current_kg_m2);
        w.scalar(BMI_CHANGE_KG_M2, self.bmi_change_kg_m2);
        w.scalar(RATE_KG_PER_WEEK, self.rate_kg_per_week);
        w.scalar(MAX_LOSS_PERCENT, self.max_loss_percent);
        if let Some(c) = self.bmi_category_baseline {
            w.code(BMI_CATEGORY_BASELINE, c);
        }
        if let Some(c) = self.bmi_category_current {
            w.code(BMI_CATEGORY_CURRENT, c);
        }
        if let Some(c) = self.weight_change_category {
            w.code(WEIGHT_CHANGE_CATEGORY, c);
        }
        w.code(CURRENT_WEIGHT_SOURCE, self.current_weight_source);
        w.table(MILESTONES, MILESTONES_LABEL, &self.milestones);
        w.table(LABS, LABS_LABEL, &self.labs);
        w.table(TRAJECTORY, TRAJECTORY_LABEL, &self.trajectory);
        w.flags(&self.flags);
    }
}

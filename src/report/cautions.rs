//! The cautions printed on every report. One place, so HTML and PDF carry the same words.

/// Cautions on a participant's own report (the floors are the program's).
pub fn participant(t: &super::guidance::Thresholds) -> Vec<String> {
    // What should be reviewed with a licensed clinician: one clause for each kind of clinical
    // flag in [`CLINICAL_FLAGS`], in the order of [`Clause::ALL`], so that the list a
    // participant reads names every flag the group report counts (it named no low fasting
    // glucose, `lab_low_glucose`, while the group report's list did).
    let named: Vec<String> = Clause::ALL
        .iter()
        .filter(|c| CLINICAL_FLAGS.iter().any(|f| f.clause == **c))
        .filter_map(|c| c.words(t))
        .collect();
    let list = match named.split_last() {
        Some((last, [])) => last.clone(),
        Some((last, rest)) => format!("{}, and {last}", rest.join(", ")),
        None => String::new(),
    };
    let mut review = format!(
        "{} should be reviewed with a licensed clinician.",
        capitalise(&list)
    );
    for c in Clause::ALL {
        if let Some(s) = c.sentence()
            && CLINICAL_FLAGS.iter().any(|f| f.clause == c)
        {
            review.push(' ');
            review.push_str(s);
        }
    }
    vec![
        "This report is information about your progress in the program, not medical advice. It does not diagnose or treat any condition.".into(),
        "Figures are estimates from your own records and from published equations and models; real bodies vary, and every figure has some uncertainty.".into(),
        review,
        "Local rules and the advice of your own licensed clinician come first.".into(),
    ]
}

fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    c.next()
        .map(|f| f.to_uppercase().chain(c).collect())
        .unwrap_or_default()
}

/// Where the participant's "Please read" box names a clinical flag: a clause of its list of
/// what should be reviewed with a licensed clinician, or a sentence of its own after it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Clause {
    /// Very low intakes (logged, or implied by the weight trend).
    LowIntake,
    /// Eating less than the body uses at rest.
    BelowResting,
    /// Losing or gaining fast.
    FastChange,
    /// A sudden step in the weigh-ins.
    WeighInStep,
    /// A low BMI, or one heading there.
    LowBmi,
    /// Lab values in the prediabetes or diabetes range.
    HighGlucose,
    /// A fasting glucose below the normal range.
    LowGlucose,
    /// Severe high blood pressure.
    SevereBp,
    /// An eGFR below 60 (kidney function).
    LowEgfr,
    /// A medicine for blood sugar (its own sentence).
    Medication,
    /// A pregnancy (its own sentence).
    Pregnancy,
    /// Breastfeeding (its own sentence).
    Breastfeeding,
}

impl Clause {
    /// Every clause, in the order the box prints them.
    pub const ALL: [Clause; 12] = [
        Clause::LowIntake,
        Clause::BelowResting,
        Clause::FastChange,
        Clause::WeighInStep,
        Clause::LowBmi,
        Clause::HighGlucose,
        Clause::LowGlucose,
        Clause::SevereBp,
        Clause::LowEgfr,
        Clause::Medication,
        Clause::Pregnancy,
        Clause::Breastfeeding,
    ];

    /// The clause's words in the list, with the program's thresholds; `None` for a clause
    /// that is a sentence of its own.
    fn words(self, t: &super::guidance::Thresholds) -> Option<String> {
        Some(match self {
            Clause::LowIntake => format!(
                "very low intakes (below about {} kcal a day for women or {} for men)",
                super::format::int(t.floor_female),
                super::format::int(t.floor_male)
            ),
            Clause::BelowResting => {
                "eating less than your body uses at rest for weeks on end".into()
            }
            Clause::FastChange => format!(
                "losing or gaining more than about {} a week for several weeks",
                kg_and_lb(t.fast_change_kg_per_week)
            ),
            Clause::LowBmi => format!(
                "a BMI under {} (or under {} while still losing; {} from age 70)",
                bmi(t.underweight_bmi_below),
                bmi(t.low_bmi_losing_below),
                bmi(t.low_bmi_losing_below.max(t.low_bmi_losing_below_70_plus))
            ),
            Clause::WeighInStep => "a sudden jump in your weigh-ins".into(),
            Clause::HighGlucose => "lab values in the prediabetes or diabetes range".into(),
            // The `outcomes` module's cut-off (ADA Standards of Care 2025, §6, level 1
            // hypoglycaemia; from memory, as cited there), in both units as the lab table
            // prints a glucose.
            Clause::LowGlucose => {
                let mg = cohortpress_metric_outcomes::LOW_GLUCOSE_MG_DL;
                format!(
                    "a fasting glucose below {} mg/dL ({} mmol/L)",
                    super::format::int(mg),
                    super::format::fixed(
                        mg / cohortpress_metric_api::units::GLUCOSE_MGDL_PER_MMOLL,
                        1
                    )
                )
            }
            // The `outcomes` module's line (ACC/AHA 2017, from memory, as cited there).
            Clause::SevereBp => {
                let (sys, dia) = cohortpress_metric_outcomes::SEVERE_BP_MMHG;
                format!(
                    "a blood pressure above {}/{} mmHg",
                    super::format::int(sys),
                    super::format::int(dia)
                )
            }
            // The `outcomes` module's line (KDIGO 2012 G3a and below; from memory, as cited
            // there).
            Clause::LowEgfr => format!(
                "an eGFR (an estimate of kidney function) below {}",
                super::format::int(cohortpress_metric_outcomes::LOW_EGFR)
            ),
            Clause::Medication | Clause::Pregnancy | Clause::Breastfeeding => return None,
        })
    }

    /// The clause's sentence after the list; `None` for a clause of the list.
    fn sentence(self) -> Option<&'static str> {
        match self {
            Clause::Medication => Some(
                "If you take medication for blood sugar or blood pressure, talk to your clinician before changing how you eat or exercise.",
            ),
            Clause::Pregnancy => Some(
                "If you are pregnant, the suggestions here do not apply: your clinician or midwife guides weight and eating in pregnancy.",
            ),
            Clause::Breastfeeding => Some(
                "If you are breastfeeding, they do not apply either: making milk takes energy these figures do not count, and your clinician or midwife guides eating then.",
            ),
            _ => None,
        }
    }
}

/// A BMI cut-off as a reader writes it: `20`, `18.5`, `19.5` (one decimal only when it has one;
/// whole decimals would print a program's 19.5 as "20").
fn bmi(v: f64) -> String {
    let tenths = (v * 10.0).round();
    super::format::fixed(tenths / 10.0, usize::from(tenths % 10.0 != 0.0))
}

/// A weekly rate in both units, as a reader writes it: `1 kg (2 lb)`, `0.75 kg (2 lb)`,
/// `1.5 kg (3 lb)`. The printed "about 1 kg (2 lb)" stood beside a program whose `outcomes`
/// module flags fast change from 0.75 kg a week.
fn kg_and_lb(kg: f64) -> String {
    let hundredths = (kg * 100.0).round();
    let decimals = if hundredths % 10.0 != 0.0 {
        2
    } else {
        usize::from(hundredths % 100.0 != 0.0)
    };
    let lb = (kg / cohortpress_metric_api::units::KG_PER_LB)
        .round()
        .max(1.0);
    format!(
        "{} kg ({} lb)",
        super::format::fixed(hundredths / 100.0, decimals),
        super::format::int(lb)
    )
}

/// Cautions on a group report.
pub fn group(min_cell: u32) -> Vec<String> {
    vec![
        "This is a de-identified summary for program evaluation. It contains no names or participant ids, and it is not medical advice.".into(),
        format!(
            "Counts from 1 to {} are not shown exactly (the report gives the range its other figures already imply, or says “not shown (privacy)”; a chart with such a count is not drawn), and other cells are hidden too where a hidden count could otherwise be worked out by subtraction; groups with fewer than {} participants are withheld or combined.",
            min_cell.saturating_sub(1),
            min_cell
        ),
        "Weight outcomes are given under modified intention-to-treat (everyone who started, that is who has a baseline weight, with the starting weight carried forward for anyone without a recent weigh-in) and for completers only; completer figures alone overstate what a program achieves.".into(),
        format!(
            "Individual clinical flags ({}) are routed to participants' own reports and, where the program names a recipient, to a private follow-up list for the program's clinician; only the number of people with one appears here (it includes flags first seen at follow-up weigh-ins of people who stopped the program). Local rules and licensed practice come first.",
            CLINICAL_FLAGS
                .iter()
                .map(|f| f.group)
                .collect::<Vec<_>>()
                .join(", ")
        ),
    ]
}

/// A flag a module raises as clinical, with the group report's words for it and where the
/// participant's "Please read" box names it.
#[derive(Debug, Clone, Copy)]
pub struct ClinicalFlag {
    /// The flag's code.
    pub code: &'static str,
    /// The group report's words for it.
    pub group: &'static str,
    /// Where the participant's own cautions name it.
    pub clause: Clause,
}

/// Every flag a module raises as clinical (a participant report's, the follow-up list's and the
/// group report's count of people with one). The group report's cautions name them all, so a
/// sponsor reads what the count covers; its list named four ("very low intake, fast loss, low
/// BMI, lab values in the diabetes range") while a low fasting glucose, a fast rise, a step in
/// the weigh-ins and eight more were counted too. The participant's cautions name each by its
/// [`Clause`], so the two lists cannot drift apart.
pub const CLINICAL_FLAGS: [ClinicalFlag; 17] = [
    ClinicalFlag {
        code: "very_low_intake",
        group: "a very low logged intake",
        clause: Clause::LowIntake,
    },
    ClinicalFlag {
        code: "very_low_implied_intake",
        group: "a weight trend that implies a very low intake",
        clause: Clause::LowIntake,
    },
    ClinicalFlag {
        code: "low_intake",
        group: "a low intake",
        clause: Clause::LowIntake,
    },
    ClinicalFlag {
        code: "below_resting_intake",
        group: "intake below resting energy for weeks",
        clause: Clause::BelowResting,
    },
    ClinicalFlag {
        code: "fast_loss",
        group: "fast loss",
        clause: Clause::FastChange,
    },
    ClinicalFlag {
        code: "fast_gain",
        group: "a fast rise",
        clause: Clause::FastChange,
    },
    ClinicalFlag {
        code: "weigh_in_step",
        group: "a step in the weigh-ins",
        clause: Clause::WeighInStep,
    },
    ClinicalFlag {
        code: "low_bmi",
        group: "a low BMI",
        clause: Clause::LowBmi,
    },
    ClinicalFlag {
        code: "forecast_underweight",
        group: "a forecast of weight falling into the underweight range",
        clause: Clause::LowBmi,
    },
    ClinicalFlag {
        code: "lab_diabetes_range",
        group: "a lab value in the diabetes range",
        clause: Clause::HighGlucose,
    },
    ClinicalFlag {
        code: "lab_low_glucose",
        group: "a fasting glucose below 70 mg/dL (low blood sugar)",
        clause: Clause::LowGlucose,
    },
    ClinicalFlag {
        code: "lab_severe_bp",
        group: "a blood pressure above 180/120 mmHg",
        clause: Clause::SevereBp,
    },
    ClinicalFlag {
        code: "lab_low_egfr",
        group: "an eGFR below 60 (kidney function)",
        clause: Clause::LowEgfr,
    },
    ClinicalFlag {
        code: "lab_very_low_egfr",
        group: "an eGFR below 30 (kidney function)",
        clause: Clause::LowEgfr,
    },
    ClinicalFlag {
        code: "medication_review",
        group: "a glucose-lowering medicine to review",
        clause: Clause::Medication,
    },
    ClinicalFlag {
        code: "pregnancy",
        group: "a pregnancy noted in the profile",
        clause: Clause::Pregnancy,
    },
    ClinicalFlag {
        code: "breastfeeding",
        group: "breastfeeding noted in the profile",
        clause: Clause::Breastfeeding,
    },
];

#[cfg(test)]
mod tests {
    use super::*;

    /// The group report's count of people with a clinical flag includes flags seen only at
    /// follow-up weigh-ins after someone stopped the program (kept on purpose: they matter to a
    /// clinician); the cautions said nothing of it. The words are the same in every report, so
    /// they say nothing about whether such a person exists.
    #[test]
    fn the_group_cautions_say_the_flag_count_includes_follow_up() {
        let text = group(11)[3].clone();
        assert!(
            text.contains("it includes flags first seen at follow-up weigh-ins of people who stopped the program"),
            "{text}"
        );
    }

    /// Every flag a module can raise as clinical is named in the group report's cautions: the
    /// list named four (no low fasting glucose, `lab_low_glucose`, nor a fast rise, a step in the
    /// weigh-ins, low or below-resting intake, a forecast into underweight, medication review or
    /// pregnancy) while the count beside it covered them all. A flag code is clinical here when
    /// the follow-up list has a reason of its own for it, as it has for every clinical flag.
    #[test]
    fn the_group_cautions_name_every_clinical_flag() {
        use cohortpress_metric_api::view::Code;
        use cohortpress_metric_energy::view::EnergyFlag;
        use cohortpress_metric_outcomes::view::OutcomesFlag;
        use cohortpress_metric_trend::view::TrendFlag;
        let generic = super::super::followup::reason("no_such_flag");
        let codes: Vec<&str> = OutcomesFlag::all()
            .iter()
            .map(|c| c.code())
            .chain(EnergyFlag::all().iter().map(|c| c.code()))
            .chain(TrendFlag::all().iter().map(|c| c.code()))
            .filter(|c| super::super::followup::reason(c) != generic)
            .collect();
        assert!(codes.contains(&"lab_low_glucose"), "{codes:?}");
        let text = group(11)[3].clone();
        for code in &codes {
            let words = CLINICAL_FLAGS
                .iter()
                .find(|f| f.code == *code)
                .unwrap_or_else(|| panic!("{code}: no words in CLINICAL_FLAGS"))
                .group;
            assert!(text.contains(words), "{code}: {words} not in {text}");
        }
        assert_eq!(codes.len(), CLINICAL_FLAGS.len(), "{codes:?}");
        assert!(
            text.contains("a fasting glucose below 70 mg/dL (low blood sugar)"),
            "{text}"
        );
    }

    /// The participant's own "Please read" box named "lab values in the prediabetes or
    /// diabetes range" but no low fasting glucose (`lab_low_glucose`), which the group report's
    /// list and the follow-up list name. Each clinical flag is named by its clause, so every
    /// clause a flag of [`CLINICAL_FLAGS`] has is in the box.
    #[test]
    fn the_participant_cautions_name_every_clinical_flag_s_clause() {
        let t = super::super::guidance::Thresholds::default();
        let text = participant(&t)[2].clone();
        assert_eq!(
            text,
            "Very low intakes (below about 1,200 kcal a day for women or 1,500 for men), eating less than your body uses at rest for weeks on end, losing or gaining more than about 1 kg (2 lb) a week for several weeks, a sudden jump in your weigh-ins, a BMI under 18.5 (or under 20 while still losing; 22 from age 70), lab values in the prediabetes or diabetes range, a fasting glucose below 70 mg/dL (3.9 mmol/L), a blood pressure above 180/120 mmHg, and an eGFR (an estimate of kidney function) below 60 should be reviewed with a licensed clinician. If you take medication for blood sugar or blood pressure, talk to your clinician before changing how you eat or exercise. If you are pregnant, the suggestions here do not apply: your clinician or midwife guides weight and eating in pregnancy. If you are breastfeeding, they do not apply either: making milk takes energy these figures do not count, and your clinician or midwife guides eating then."
        );
        for f in CLINICAL_FLAGS {
            let said = match (f.clause.words(&t), f.clause.sentence()) {
                (Some(w), _) => text.to_lowercase().contains(&w.to_lowercase()),
                (None, Some(s)) => text.contains(s),
                (None, None) => false,
            };
            assert!(said, "{}: {:?} not in {text}", f.code, f.clause);
        }
        // Every clause is used by some flag (none is printed for nothing).
        for c in Clause::ALL {
            assert!(CLINICAL_FLAGS.iter().any(|f| f.clause == c), "{c:?}");
        }
    }

    /// The fast-change rate the cautions name is the program's own (`outcomes`'
    /// `fast_loss_kg_per_week`), not always "about 1 kg (2 lb)".
    #[test]
    fn the_fast_change_rate_is_the_programs() {
        let mut t = super::super::guidance::Thresholds::default();
        let text = participant(&t)[2].clone();
        assert!(
            text.contains("more than about 1 kg (2 lb) a week"),
            "{text}"
        );
        t.fast_change_kg_per_week = 0.75;
        let text = participant(&t)[2].clone();
        assert!(
            text.contains("more than about 0.75 kg (2 lb) a week"),
            "{text}"
        );
        t.fast_change_kg_per_week = 1.5;
        let text = participant(&t)[2].clone();
        assert!(
            text.contains("more than about 1.5 kg (3 lb) a week"),
            "{text}"
        );
    }

    /// A program's `low_bmi_losing_below: 19.5` printed as "under 20 while still losing".
    #[test]
    fn bmi_cut_offs_keep_their_decimal() {
        let mut t = super::super::guidance::Thresholds::default();
        let text = participant(&t)[2].clone();
        assert!(
            text.contains("a BMI under 18.5 (or under 20 while still losing; 22 from age 70)"),
            "{text}"
        );
        t.low_bmi_losing_below = 19.5;
        t.underweight_bmi_below = 18.0;
        let text = participant(&t)[2].clone();
        assert!(
            text.contains("a BMI under 18 (or under 19.5 while still losing; 22 from age 70)"),
            "{text}"
        );
    }
}

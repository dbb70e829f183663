//! The cautions printed on every report. One place, so HTML and PDF carry the same words.

/// Cautions on a participant's own report (the floors are the program's).
pub fn participant(t: &super::guidance::Thresholds) -> Vec<String> {
    vec![
        "This report is information about your progress in the program, not medical advice. It does not diagnose or treat any condition.".into(),
        "Figures are estimates from your own records and from published equations and models; real bodies vary, and every figure has some uncertainty.".into(),
        format!(
            "Very low intakes (below about {} kcal a day for women or {} for men), eating less than your body uses at rest for weeks on end, losing or gaining more than about {} a week for several weeks, a BMI under {} (or under {} while still losing; {} from age 70), and lab values in the prediabetes or diabetes range should be reviewed with a licensed clinician. If you take medication for blood sugar or blood pressure, talk to your clinician before changing how you eat or exercise. If you are pregnant, the suggestions here do not apply: your clinician or midwife guides weight and eating in pregnancy.",
            super::format::int(t.floor_female),
            super::format::int(t.floor_male),
            kg_and_lb(t.fast_change_kg_per_week),
            bmi(t.underweight_bmi_below),
            bmi(t.low_bmi_losing_below),
            bmi(t.low_bmi_losing_below.max(t.low_bmi_losing_below_70_plus))
        ),
        "Local rules and the advice of your own licensed clinician come first.".into(),
    ]
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
                .map(|(_, words)| *words)
                .collect::<Vec<_>>()
                .join(", ")
        ),
    ]
}

/// Every flag a module raises as clinical (a participant report's, the follow-up list's and the
/// group report's count of people with one), as (code, the group report's words for it). The
/// group report's cautions name them all, so a sponsor reads what the count covers; its list
/// named four ("very low intake, fast loss, low BMI, lab values in the diabetes range") while a
/// low fasting glucose, a fast rise, a step in the weigh-ins and eight more were counted too.
pub const CLINICAL_FLAGS: [(&str, &str); 13] = [
    ("very_low_intake", "a very low logged intake"),
    (
        "very_low_implied_intake",
        "a weight trend that implies a very low intake",
    ),
    ("low_intake", "a low intake"),
    (
        "below_resting_intake",
        "intake below resting energy for weeks",
    ),
    ("fast_loss", "fast loss"),
    ("fast_gain", "a fast rise"),
    ("weigh_in_step", "a step in the weigh-ins"),
    ("low_bmi", "a low BMI"),
    (
        "forecast_underweight",
        "a forecast of weight falling into the underweight range",
    ),
    ("lab_diabetes_range", "a lab value in the diabetes range"),
    (
        "lab_low_glucose",
        "a fasting glucose below 70 mg/dL (low blood sugar)",
    ),
    ("medication_review", "a glucose-lowering medicine to review"),
    ("pregnancy", "a pregnancy noted in the profile"),
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
                .find(|(c, _)| c == code)
                .unwrap_or_else(|| panic!("{code}: no words in CLINICAL_FLAGS"))
                .1;
            assert!(text.contains(words), "{code}: {words} not in {text}");
        }
        assert_eq!(codes.len(), CLINICAL_FLAGS.len(), "{codes:?}");
        assert!(
            text.contains("a fasting glucose below 70 mg/dL (low blood sugar)"),
            "{text}"
        );
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

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
        "Individual clinical flags (very low intake, fast loss, low BMI, lab values in the diabetes range) are routed to participants' own reports and, where the program names a recipient, to a private follow-up list for the program's clinician; only the number of people with one appears here (it includes flags first seen at follow-up weigh-ins of people who stopped the program). Local rules and licensed practice come first.".into(),
    ]
}

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

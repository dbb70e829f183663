//! Number, unit, date and percentage formatting shared by the report model and the template
//! helpers, so HTML and PDF print every figure the same way.

use chrono::NaiveDate;
use cohortpress_metric_api::UnitSystem;
use cohortpress_metric_api::units::Mass;

/// A weight in the display unit, one decimal: `82.4 kg` / `181.7 lb`.
pub fn weight(kg: f64, units: UnitSystem) -> String {
    match units {
        UnitSystem::Metric => format!("{} kg", fixed(kg, 1)),
        UnitSystem::UsCustomary => format!("{} lb", fixed(Mass::from_kg(kg).lb(), 1)),
    }
}

/// A weight change with its sign: `−3.2 kg` / `+1.0 lb`.
pub fn weight_change(kg: f64, units: UnitSystem) -> String {
    let (v, u) = match units {
        UnitSystem::Metric => (kg, "kg"),
        UnitSystem::UsCustomary => (Mass::from_kg(kg).lb(), "lb"),
    };
    format!("{} {u}", signed(v, 1))
}

/// A rate per week with its sign: `−0.4 kg/week`.
pub fn rate_per_week(kg_per_week: f64, units: UnitSystem) -> String {
    let (v, u) = match units {
        UnitSystem::Metric => (kg_per_week, "kg"),
        UnitSystem::UsCustomary => (Mass::from_kg(kg_per_week).lb(), "lb"),
    };
    format!("{} {u}/week", signed(v, 2))
}

/// Weight in the display unit as a bare number (for chart axes).
pub fn weight_value(kg: f64, units: UnitSystem) -> f64 {
    match units {
        UnitSystem::Metric => kg,
        UnitSystem::UsCustomary => Mass::from_kg(kg).lb(),
    }
}

/// The display unit's symbol.
pub fn weight_unit(units: UnitSystem) -> &'static str {
    match units {
        UnitSystem::Metric => "kg",
        UnitSystem::UsCustomary => "lb",
    }
}

/// A height in the display unit: `168 cm` / `5 ft 6 in`.
pub fn height(cm: f64, units: UnitSystem) -> String {
    match units {
        UnitSystem::Metric => format!("{} cm", fixed(cm, 0)),
        UnitSystem::UsCustomary => {
            let inches = (cm / cohortpress_metric_api::units::CM_PER_IN).round() as i64;
            format!("{} ft {} in", inches / 12, inches % 12)
        }
    }
}

/// A percentage with sign: `−4.8 %`.
pub fn percent_change(p: f64) -> String {
    format!("{} %", signed(p, 1))
}

/// A plain percentage: `62 %`.
pub fn percent(p: f64, decimals: usize) -> String {
    format!("{} %", fixed(p, decimals))
}

/// Energy: `1 850 kcal/day` (thin grouping so large numbers stay readable).
pub fn kcal_per_day(v: f64) -> String {
    format!("{} kcal/day", group_thousands(v.round() as i64))
}

/// Energy without a time unit, for sentences that say "a day" in words: `1 850 kcal`.
pub fn kcal(v: f64) -> String {
    format!("{} kcal", group_thousands(v.round() as i64))
}

/// Signed energy change: `−350 kcal/day`.
pub fn kcal_change(v: f64) -> String {
    let r = v.round() as i64;
    let sign = if r > 0 {
        "+"
    } else if r < 0 {
        "\u{2212}"
    } else {
        ""
    };
    format!("{sign}{} kcal/day", group_thousands(r.abs()))
}

/// `site` → `Site` (group keys as headings).
pub fn capitalise(s: &str) -> String {
    let mut c = s.chars();
    match c.next() {
        Some(f) => f.to_uppercase().collect::<String>() + c.as_str(),
        None => String::new(),
    }
}

/// A date as `14 Sep 2026`.
pub fn date(d: NaiveDate) -> String {
    d.format("%-d %b %Y").to_string()
}

/// A month as `September 2026`.
pub fn month(d: NaiveDate) -> String {
    d.format("%B %Y").to_string()
}

/// A number with `decimals` places; `−0.0` prints as `0.0`.
pub fn fixed(v: f64, decimals: usize) -> String {
    let s = format!("{v:.decimals$}");
    let zero = format!("{:.decimals$}", 0.0);
    if s.trim_start_matches('-') == zero {
        zero
    } else {
        s.replace('-', "\u{2212}")
    }
}

/// A number with an explicit sign (`+`, or a true minus sign).
pub fn signed(v: f64, decimals: usize) -> String {
    let s = fixed(v, decimals);
    if s.starts_with('\u{2212}') || s.trim_start_matches(['0', '.']).is_empty() {
        s
    } else {
        format!("+{s}")
    }
}

fn group_thousands(v: i64) -> String {
    let digits = v.abs().to_string();
    let mut out = String::new();
    for (i, ch) in digits.chars().enumerate() {
        if i > 0 && (digits.len() - i).is_multiple_of(3) {
            out.push('\u{202f}');
        }
        out.push(ch);
    }
    if v < 0 { format!("\u{2212}{out}") } else { out }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formats_are_stable() {
        assert_eq!(weight(82.44, UnitSystem::Metric), "82.4 kg");
        // 1 lb = 0.45359237 kg exactly (international yard and pound, 1959): 100 kg = 220.46 lb.
        assert_eq!(weight(100.0, UnitSystem::UsCustomary), "220.5 lb");
        assert_eq!(weight_change(-3.21, UnitSystem::Metric), "\u{2212}3.2 kg");
        assert_eq!(weight_change(0.01, UnitSystem::Metric), "0.0 kg");
        assert_eq!(percent_change(1.25), "+1.2 %");
        assert_eq!(kcal_per_day(1850.4), "1\u{202f}850 kcal/day");
        assert_eq!(kcal_change(-350.0), "\u{2212}350 kcal/day");
        assert_eq!(kcal(1125.6), "1\u{202f}126 kcal");
        assert_eq!(height(167.64, UnitSystem::UsCustomary), "5 ft 6 in");
        assert_eq!(
            date(NaiveDate::from_ymd_opt(2026, 9, 4).unwrap()),
            "4 Sep 2026"
        );
    }
}

//! Number, unit, date and percentage formatting shared by the report model and the template
//! helpers, so HTML and PDF print every figure the same way.
//!
//! The reports are written in English, and the thousands separator is decided once, here, for
//! that locale: a comma (`1,850 kcal`), as English-language style guides and CLDR's `en` locale
//! write it. Every whole number of four digits or more in a report goes through [`int`] (or
//! [`kcal`] and friends), so one page never mixes `1,020` and `1020`.

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

/// The change from `from_kg` to `to_kg` as the difference of the two weights as [`weight`]
/// prints them, so the three figures add up on the page: 86.05 kg → 83.18 kg prints 86.0 kg,
/// 83.2 kg and `−2.8 kg`, not the unrounded change's `−2.9 kg` (the percent beside it stays the
/// unrounded one).
pub fn weight_change_between(from_kg: f64, to_kg: f64, units: UnitSystem) -> String {
    let shown = |kg: f64| (weight_value(kg, units) * 10.0).round() / 10.0;
    let (v, u) = (shown(to_kg) - shown(from_kg), weight_unit(units));
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

/// The thousands separator of the report locale (English: a comma).
pub const THOUSANDS_SEPARATOR: char = ',';

/// A whole number with the locale's thousands separator: `1,850`, `−1,020`, `950`.
pub fn int(v: f64) -> String {
    group_thousands(v.round() as i64)
}

/// `v` rounded to the nearest multiple of `step` (for amounts people act on: 50 kcal, 5 min).
pub fn round_to(v: f64, step: f64) -> f64 {
    (v / step).round() * step
}

/// `v` rounded down to a multiple of `step`.
pub fn floor_to(v: f64, step: f64) -> f64 {
    (v / step + 1e-9).floor() * step
}

/// `v` rounded up to a multiple of `step`.
pub fn ceil_to(v: f64, step: f64) -> f64 {
    (v / step - 1e-9).ceil() * step
}

/// Rewrites module text for a participant's page: a bare whole number of four or more digits
/// followed by ` kcal`, or counting days, weigh-ins, rows, readings, minutes or weeks, gets the
/// locale's separator (`1150 kcal` → `1,150 kcal`, `1096 logged days` → `1,096 logged days`), and an ISO
/// date (`2026-08-01`) becomes the report's date format (`1 Aug 2026`). Years and other numbers
/// are left alone.
pub fn tidy_message(text: &str) -> String {
    // Words after which a number counts things, never a year.
    const COUNTED_NOUNS: [&str; 7] = [
        "days",
        "logged",
        "weigh-ins",
        "rows",
        "readings",
        "minutes",
        "weeks",
    ];
    let chars: Vec<char> = text.chars().collect();
    let mut out = String::with_capacity(text.len() + 8);
    // After "interval 1920", the " to 2199" that closes the range is energy too.
    let mut range_partner = false;
    let mut i = 0;
    while i < chars.len() {
        let c = chars[i];
        let prev_ok = i == 0 || !(chars[i - 1].is_alphanumeric() || chars[i - 1] == '.');
        if c.is_ascii_digit() && prev_ok {
            let mut j = i;
            while j < chars.len() && chars[j].is_ascii_digit() {
                j += 1;
            }
            let digits: String = chars[i..j].iter().collect();
            // ISO date?
            if j - i == 4 && j + 6 <= chars.len() {
                let cand: String = chars[i..j + 6].iter().collect();
                let end_ok = chars.get(j + 6).is_none_or(|c| !c.is_ascii_digit());
                if end_ok && let Ok(d) = NaiveDate::parse_from_str(&cand, "%Y-%m-%d") {
                    out.push_str(&date(d));
                    i = j + 6;
                    continue;
                }
            }
            let rest: String = chars[j..(j + 5).min(chars.len())].iter().collect();
            let is_energy = rest == " kcal" || out.ends_with("interval ") || range_partner;
            range_partner = out.ends_with("interval ");
            // A count of days, weigh-ins or rows is never a year: "over 1096 logged days" (a
            // three-year log) beside "about 1,096 kcal a day" read as two kinds of number.
            let next_word: String = chars[j..]
                .iter()
                .skip(1)
                .take_while(|c| c.is_alphanumeric() || **c == '-')
                .collect();
            let is_count =
                chars.get(j) == Some(&' ') && COUNTED_NOUNS.contains(&next_word.as_str());
            if j - i >= 4
                && (is_energy || is_count)
                && let Ok(n) = digits.parse::<i64>()
            {
                out.push_str(&group_thousands(n));
            } else {
                out.push_str(&digits);
            }
            i = j;
            continue;
        }
        if range_partner && !(c == ' ' || c.is_alphabetic() || c == '–') {
            range_partner = false;
        }
        out.push(c);
        i += 1;
    }
    out
}

/// Energy: `1,850 kcal/day`.
pub fn kcal_per_day(v: f64) -> String {
    format!("{} kcal/day", group_thousands(v.round() as i64))
}

/// Energy without a time unit, for sentences that say "a day" in words: `1,850 kcal`.
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
            out.push(THOUSANDS_SEPARATOR);
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
        // The difference of the printed weights, in either unit.
        assert_eq!(
            weight_change_between(86.046_5, 83.175_4, UnitSystem::Metric),
            "\u{2212}2.8 kg"
        );
        assert_eq!(
            weight_change(83.175_4 - 86.046_5, UnitSystem::Metric),
            "\u{2212}2.9 kg"
        );
        // 297.24 lb → 288.86 lb prints 297.2 lb, 288.9 lb and "−8.3 lb" (unrounded −8.38).
        let kg = |lb: f64| lb * cohortpress_metric_api::units::KG_PER_LB;
        assert_eq!(
            weight_change_between(kg(297.24), kg(288.86), UnitSystem::UsCustomary),
            "\u{2212}8.3 lb"
        );
        assert_eq!(
            weight_change(kg(288.86) - kg(297.24), UnitSystem::UsCustomary),
            "\u{2212}8.4 lb"
        );
        assert_eq!(
            weight_change_between(80.04, 80.0, UnitSystem::Metric),
            "0.0 kg"
        );
        assert_eq!(percent_change(1.25), "+1.2 %");
        assert_eq!(kcal_per_day(1850.4), "1,850 kcal/day");
        assert_eq!(int(-1020.2), "\u{2212}1,020");
        assert_eq!(int(950.0), "950");
        assert_eq!(round_to(651.0, 50.0), 650.0);
        assert_eq!(floor_to(699.0, 50.0), 650.0);
        assert_eq!(ceil_to(51.0, 5.0), 55.0);
        assert_eq!(ceil_to(50.0, 5.0), 50.0);
        assert_eq!(kcal_change(-350.0), "\u{2212}350 kcal/day");
        assert_eq!(kcal(1125.6), "1,126 kcal");
        assert_eq!(height(167.64, UnitSystem::UsCustomary), "5 ft 6 in");
        assert_eq!(
            date(NaiveDate::from_ymd_opt(2026, 9, 4).unwrap()),
            "4 Sep 2026"
        );
    }

    #[test]
    fn module_text_gets_one_number_and_date_format() {
        assert_eq!(
            tidy_message("about 1150 kcal a day, below 1200 kcal a day (Archer et al. 2013)"),
            "about 1,150 kcal a day, below 1,200 kcal a day (Archer et al. 2013)"
        );
        assert_eq!(
            tidy_message("most recently 2026-08-01 to 2026-08-21: 950 kcal, 1.5 kg"),
            "most recently 1 Aug 2026 to 21 Aug 2026: 950 kcal, 1.5 kg"
        );
        assert_eq!(tidy_message("HbA1c 6.8 %"), "HbA1c 6.8 %");
        // A three-year food log (attack18): the count beside the energy, grouped alike.
        assert_eq!(
            tidy_message(
                "Logged intake averaged about 1096 kcal a day over 1096 logged days and was \
                 below 1200 kcal a day on 837 of them; 12000 rows, 1500 weigh-ins"
            ),
            "Logged intake averaged about 1,096 kcal a day over 1,096 logged days and was \
             below 1,200 kcal a day on 837 of them; 12,000 rows, 1,500 weigh-ins"
        );
        // Years stay as written, also before a word.
        assert_eq!(
            tidy_message("in 2026 the days were 12, as in 2025; 999 days"),
            "in 2026 the days were 12, as in 2025; 999 days"
        );
        assert_eq!(
            tidy_message("about 2060 kcal/d (95 % interval 1920 to 2199). Archer et al. 2013"),
            "about 2,060 kcal/d (95 % interval 1,920 to 2,199). Archer et al. 2013"
        );
    }
}

//! Quantities as people write them: `5 ft 6 in`, `5'6"`, `168 cm`, `1.68 m`, `66 in`, and plain
//! numbers in CSV cells. Conversions use the exact factors of the metric API's `units` module.

use cohortpress_metric_api::units::Length;

/// Why a number could not be read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum NumberError {
    /// Nothing was written.
    Empty,
    /// A decimal comma (`72,5`) where a point is expected.
    DecimalComma,
    /// A number in exponent notation (`1e5`) that is within range.
    Exponent,
    /// A number too large (or too small) to hold (`1e400`, 400 digits): not finite once read.
    OutOfRange,
    /// `NaN`, `inf`, `infinity`: words a float parser takes, no measurement.
    NotFinite,
    /// Not a number at all.
    NotANumber,
}

impl NumberError {
    /// A hint for the user.
    pub fn hint(&self) -> &'static str {
        match self {
            NumberError::Empty => "fill in the value or remove the row",
            NumberError::DecimalComma => {
                "write numbers with a decimal point and no thousands separator: `72.5`, not `72,5`"
            }
            NumberError::Exponent => {
                "write the number out in full with a decimal point, e.g. `72.5` (no exponent such as `e5`)"
            }
            NumberError::OutOfRange | NumberError::NotFinite => {
                "write the measured value as a plain number such as `72.5`; check for a typing or export error"
            }
            NumberError::NotANumber => {
                "write a number such as `72.5` (no words; where a unit is allowed, after the number: `72.5 kg`)"
            }
        }
    }

    /// What is wrong, for a message: `` `1e400` is out of range (not a finite number) ``.
    pub fn describe(&self, written: &str) -> String {
        let w = written.trim();
        match self {
            NumberError::Empty => "no number".to_string(),
            NumberError::DecimalComma => format!("`{w}` has a decimal comma"),
            NumberError::Exponent => format!("`{w}` is in exponent notation"),
            NumberError::OutOfRange => {
                format!("`{w}` is out of range (not a finite number)")
            }
            NumberError::NotFinite => format!("`{w}` is not a finite number"),
            NumberError::NotANumber => format!("`{w}` is not a number"),
        }
    }
}

/// Whether `s` is a number in exponent notation: `[+-]digits[.digits]e[+-]digits`.
fn is_exponent_form(s: &str) -> bool {
    let s = s.strip_prefix(['-', '+']).unwrap_or(s);
    let Some((mantissa, exp)) = s.split_once(['e', 'E']) else {
        return false;
    };
    let exp = exp.strip_prefix(['-', '+']).unwrap_or(exp);
    let mantissa_ok = mantissa.chars().all(|c| c.is_ascii_digit() || c == '.')
        && mantissa.chars().filter(|&c| c == '.').count() <= 1
        && mantissa.chars().any(|c| c.is_ascii_digit());
    mantissa_ok && !exp.is_empty() && exp.chars().all(|c| c.is_ascii_digit())
}

/// Whether `s` is one of the words a float parser reads as a non-finite value.
fn is_non_finite_word(s: &str) -> bool {
    let s = s.strip_prefix(['-', '+']).unwrap_or(s);
    ["nan", "inf", "infinity"]
        .iter()
        .any(|w| s.eq_ignore_ascii_case(w))
}

/// The byte length of the number at the start of `s` as a tokenizer should cut it: a sign,
/// digits, points and commas, an exponent (`1e400`: cut after `e`, the rest would be read as a
/// unit `e`) and the words `nan`, `inf`, `infinity` (so they are named as numbers, not units).
pub fn number_prefix_len(s: &str) -> usize {
    let b = s.as_bytes();
    let mut i = 0;
    if i < b.len() && matches!(b[i], b'-' | b'+') {
        i += 1;
    }
    for w in ["infinity", "inf", "nan"] {
        if s.len() >= i + w.len()
            // Compared as bytes: `s` may have a character of several bytes there (an ASCII
            // match ends on a character boundary, so the slice after it is sound).
            && b[i..i + w.len()].eq_ignore_ascii_case(w.as_bytes())
            && !s[i + w.len()..].starts_with(|c: char| c.is_alphanumeric())
        {
            return i + w.len();
        }
    }
    let start = i;
    while i < b.len() && (b[i].is_ascii_digit() || matches!(b[i], b'.' | b',')) {
        i += 1;
    }
    if i > start && i < b.len() && matches!(b[i], b'e' | b'E') {
        let mut j = i + 1;
        if j < b.len() && matches!(b[j], b'-' | b'+') {
            j += 1;
        }
        if j < b.len() && b[j].is_ascii_digit() {
            while j < b.len() && b[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    if i == start { 0 } else { i }
}

/// Reads a plain decimal number (`72`, `72.5`, `-3`, `.5`). Words (`nan`, `inf`), exponents,
/// thousands separators and decimal commas are refused, each with its own reason so the message
/// can say what was found; a number too large to hold is out of range. `-0` reads as 0.
pub fn parse_decimal(s: &str) -> Result<f64, NumberError> {
    let s = s.trim();
    if s.is_empty() {
        return Err(NumberError::Empty);
    }
    let digits = s.strip_prefix(['-', '+']).unwrap_or(s);
    if let Some((a, b)) = digits.split_once(',') {
        let all_digits = |t: &str| !t.is_empty() && t.chars().all(|c| c.is_ascii_digit());
        if all_digits(a) && all_digits(b) {
            return Err(NumberError::DecimalComma);
        }
    }
    if is_non_finite_word(s) {
        return Err(NumberError::NotFinite);
    }
    if is_exponent_form(s) {
        // Out of range both ways: too large (infinite) and too small to hold (a non-zero
        // mantissa read as 0 or as a subnormal).
        let mantissa_zero = !digits
            .split(['e', 'E'])
            .next()
            .unwrap_or("")
            .chars()
            .any(|c| ('1'..='9').contains(&c));
        return Err(match s.parse::<f64>() {
            Ok(v) if v.is_finite() && (mantissa_zero || v.abs() >= f64::MIN_POSITIVE) => {
                NumberError::Exponent
            }
            _ => NumberError::OutOfRange,
        });
    }
    // Rust's float parser also takes `inf`, `NaN` and exponents (named above); people's files
    // hold none of these on purpose, so only digits and one point are read.
    let ok_chars = digits.chars().all(|c| c.is_ascii_digit() || c == '.')
        && digits.chars().filter(|&c| c == '.').count() <= 1
        && digits.chars().any(|c| c.is_ascii_digit());
    if !ok_chars {
        return Err(NumberError::NotANumber);
    }
    let v = s.parse::<f64>().map_err(|_| NumberError::NotANumber)?;
    if !v.is_finite() {
        // Hundreds of digits: beyond what a 64-bit float holds.
        return Err(NumberError::OutOfRange);
    }
    // `-0` is 0 (never printed as "−0").
    Ok(v + 0.0)
}

/// Reads a number written with thousands separators, as spreadsheets export formatted cells:
/// `1.850,5` and `1,850.5` (both separators: the last one is the decimal separator), `1.234.567`
/// or `1 850` (a separator used twice, or a space, can only group thousands). With
/// `integer_valued` (kcal, steps: no log holds them to three decimals), a single separator
/// followed by exactly three digits, `1.850` or `1,850`, groups thousands too. Groups must be
/// of three digits after a first group of one to three (not starting with 0). `None` when `s`
/// is not written so.
pub fn parse_grouped(s: &str, integer_valued: bool) -> Option<f64> {
    let s = s.trim();
    let (negative, digits) = match s.strip_prefix('-') {
        Some(rest) => (true, rest),
        None => (false, s.strip_prefix('+').unwrap_or(s)),
    };
    // The common cases (`72.5`, `1850`) are answered without allocating: numeric cells are
    // read by the hundred thousand when a large program is loaded.
    let mut count = 0usize;
    let mut last_at = 0usize;
    for (i, b) in digits.bytes().enumerate() {
        if !b.is_ascii_digit() {
            count += 1;
            last_at = i;
        }
    }
    if count == 0
        || (count == 1
            && matches!(digits.as_bytes()[last_at], b'.' | b',')
            && (!integer_valued || digits.len() - last_at - 1 != 3))
    {
        return None;
    }
    let seps: Vec<char> = digits.chars().filter(|c| !c.is_ascii_digit()).collect();
    if seps.is_empty()
        || seps
            .iter()
            .any(|c| !matches!(c, '.' | ',' | ' ' | '\u{a0}'))
    {
        return None;
    }
    let last = *seps.last()?;
    let both = seps.iter().any(|&c| c != last);
    // The decimal part, when the last separator is a decimal one.
    let (int_part, frac) = if both && matches!(last, '.' | ',') {
        let at = digits.rfind(last)?;
        (&digits[..at], Some(&digits[at + 1..]))
    } else {
        (digits, None)
    };
    let group_seps: Vec<char> = int_part.chars().filter(|c| !c.is_ascii_digit()).collect();
    let &group = group_seps.first()?;
    if group_seps.iter().any(|&c| c != group) {
        return None;
    }
    let groups: Vec<&str> = int_part.split(group).collect();
    // A first group of 1–3 digits that does not start with 0 (`0.850` is a decimal).
    let strict = (1..=3).contains(&groups[0].len())
        && !groups[0].starts_with('0')
        && groups[1..].iter().all(|g| g.len() == 3)
        && groups.iter().all(|g| g.chars().all(|c| c.is_ascii_digit()));
    if !strict {
        return None;
    }
    if frac.is_some_and(|f| f.is_empty() || !f.chars().all(|c| c.is_ascii_digit())) {
        return None;
    }
    // One `.` or `,` and nothing else: a thousands separator only for integer-valued columns.
    if frac.is_none() && groups.len() == 2 && matches!(group, '.' | ',') && !integer_valued {
        return None;
    }
    let mut text: String = groups.concat();
    if let Some(f) = frac {
        text.push('.');
        text.push_str(f);
    }
    let v: f64 = text.parse().ok()?;
    Some(if negative { -v } else { v })
}

/// A unit of body weight as people write it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MassUnit {
    /// Kilograms.
    Kg,
    /// Pounds (0.45359237 kg exactly, international yard and pound agreement, 1959).
    Lb,
    /// Stones of 14 lb.
    St,
    /// Grams (a thousandth of a kilogram), as some scales and health apps export body weight.
    /// Read only where a file states it (a header `weight_g`, a `unit` cell `g`, `72500 g`):
    /// never guessed from a number's size.
    G,
}

impl MassUnit {
    /// Reads a unit name in any case, with or without a final point (`kg`, `Lbs.`, `stone`).
    pub fn parse(u: &str) -> Option<MassUnit> {
        let u = u.trim();
        let u = u.strip_suffix('.').unwrap_or(u).to_lowercase();
        Some(match u.as_str() {
            "kg" | "kgs" | "kilo" | "kilos" | "kilogram" | "kilograms" => MassUnit::Kg,
            "lb" | "lbs" | "pound" | "pounds" => MassUnit::Lb,
            "st" | "stone" | "stones" => MassUnit::St,
            "g" | "gram" | "grams" => MassUnit::G,
            _ => return None,
        })
    }

    /// The unit's symbol (`kg`, `lb`, `st`).
    pub fn symbol(self) -> &'static str {
        match self {
            MassUnit::Kg => "kg",
            MassUnit::Lb => "lb",
            MassUnit::St => "st",
            MassUnit::G => "g",
        }
    }
}

/// A weight as written in one cell, its numbers still text (the file's decimal separator
/// decides how they read).
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum WrittenMass<'a> {
    /// One number with the unit written after it, if any: `72.5`, `72.5 kg`, `160 lbs`.
    One(&'a str, Option<MassUnit>),
    /// Stones and pounds: `14 st 2 lb`, `14st 2lb`, `14 st 2` (the pounds' unit left off).
    StonesPounds(&'a str, &'a str),
    /// A number followed by a word that is no unit of weight (`72.5 kgm`).
    UnknownUnit(&'a str),
}

/// Splits a weight cell into its number(s) and unit(s); `None` when it is not written as
/// numbers with units (the cell is then read as a plain number, which names what is wrong).
pub fn split_mass(s: &str) -> Option<WrittenMass<'_>> {
    let s = s.trim();
    let mut parts: Vec<(&str, &str)> = Vec::new();
    let mut rest = s;
    while !rest.is_empty() {
        let n = number_prefix_len(rest);
        if n == 0 {
            return None;
        }
        let (num, after) = rest.split_at(n);
        let after = after.trim_start();
        // The unit: letters, and one point after them (`lbs.`).
        let mut u = after
            .char_indices()
            .find(|(_, c)| !c.is_alphabetic())
            .map_or(after.len(), |(i, _)| i);
        if u > 0 && after[u..].starts_with('.') {
            u += 1;
        }
        parts.push((num, &after[..u]));
        rest = after[u..].trim_start();
    }
    Some(match parts.as_slice() {
        [(n, "")] => WrittenMass::One(n, None),
        [(n, u)] => match MassUnit::parse(u) {
            Some(unit) => WrittenMass::One(n, Some(unit)),
            None => WrittenMass::UnknownUnit(u),
        },
        [(st, su), (lb, lu)]
            if MassUnit::parse(su) == Some(MassUnit::St)
                && (lu.is_empty() || MassUnit::parse(lu) == Some(MassUnit::Lb)) =>
        {
            WrittenMass::StonesPounds(st, lb)
        }
        _ => return None,
    })
}

/// A duration as written in one cell, in minutes.
#[derive(Debug, Clone, PartialEq)]
pub enum WrittenDuration<'a> {
    /// A plain number: in the column's unit (minutes unless the header says hours).
    Plain(&'a str),
    /// A clock duration `h:mm:ss` (`00:45:00`, `1:10:00`), self-describing.
    Clock(f64),
    /// Numbers with units (`45 min`, `1 h 15 min`, `1h`, `90 s`): the minutes, and the unit
    /// when only one was written (`min`, `h` or `s`).
    Units(f64, Option<&'static str>),
    /// Two parts with a colon (`45:00`, `1:30`): minutes and seconds, or hours and minutes;
    /// the two numbers as written.
    Ambiguous(f64, f64),
    /// Not a duration form (the cell is then read as a plain number, which names the problem).
    Other,
}

/// Reads a duration cell (see [`WrittenDuration`]). Numbers inside are plain decimals (a
/// decimal comma is left to the plain-number reader, which knows the file's delimiter).
pub fn split_duration(s: &str) -> WrittenDuration<'_> {
    let s = s.trim();
    if s.contains(':') {
        let parts: Vec<&str> = s.split(':').collect();
        let digits = |p: &str| !p.is_empty() && p.bytes().all(|b| b.is_ascii_digit());
        return match parts.as_slice() {
            [h, m, sec]
                if digits(h)
                    && h.len() <= 3
                    && m.len() == 2
                    && digits(m)
                    && digits(sec.split('.').next().unwrap_or(""))
                    && sec.split('.').next().is_some_and(|x| x.len() == 2) =>
            {
                let (Ok(h), Ok(m), Ok(sec)) =
                    (h.parse::<f64>(), m.parse::<f64>(), sec.parse::<f64>())
                else {
                    return WrittenDuration::Other;
                };
                if m >= 60.0 || sec >= 60.0 {
                    return WrittenDuration::Other;
                }
                WrittenDuration::Clock(h * 60.0 + m + sec / 60.0)
            }
            [a, b] if digits(a) && digits(b) && b.len() == 2 => {
                match (a.parse::<f64>(), b.parse::<f64>()) {
                    (Ok(a), Ok(b)) if b < 60.0 => WrittenDuration::Ambiguous(a, b),
                    _ => WrittenDuration::Other,
                }
            }
            _ => WrittenDuration::Other,
        };
    }
    if parse_decimal(s).is_ok() || !s.chars().any(char::is_alphabetic) {
        return WrittenDuration::Plain(s);
    }
    // Numbers with units, largest first, each unit once: `1 h 15 min`, `1h15m`, `45 mins`.
    let mut rest = s;
    let mut minutes = 0.0;
    let mut units: Vec<&'static str> = Vec::new();
    while !rest.is_empty() {
        let n = number_prefix_len(rest);
        let Ok(v) = parse_decimal(&rest[..n]) else {
            return WrittenDuration::Other;
        };
        let after = rest[n..].trim_start();
        let u = after
            .char_indices()
            .find(|(_, c)| !c.is_alphabetic())
            .map_or(after.len(), |(i, _)| i);
        let (unit, per_minute) = match after[..u].to_lowercase().as_str() {
            "h" | "hr" | "hrs" | "hour" | "hours" => ("h", 60.0),
            "m" | "min" | "mins" | "minute" | "minutes" => ("min", 1.0),
            "s" | "sec" | "secs" | "second" | "seconds" => ("s", 1.0 / 60.0),
            _ => return WrittenDuration::Other,
        };
        let rank = |u: &str| ["h", "min", "s"].iter().position(|x| *x == u);
        if units.last().is_some_and(|&last| rank(last) >= rank(unit)) {
            return WrittenDuration::Other;
        }
        units.push(unit);
        minutes += v * per_minute;
        rest = after[u..].trim_start();
    }
    WrittenDuration::Units(minutes, (units.len() == 1).then(|| units[0]))
}

/// Why a length could not be read.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct QuantityError {
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub hint: String,
}

fn qerr(message: impl Into<String>) -> QuantityError {
    QuantityError {
        message: message.into(),
        hint: "write the unit with the number: `168 cm`, `1.68 m`, `66 in`, `5 ft 6 in` or `5'6\"`"
            .into(),
    }
}

#[derive(Debug, Clone, Copy, PartialEq)]
enum LenUnit {
    Cm,
    M,
    In,
    Ft,
}

fn len_unit(u: &str) -> Option<LenUnit> {
    Some(match u {
        "cm" | "cms" | "centimeter" | "centimeters" | "centimetre" | "centimetres" => LenUnit::Cm,
        "m" | "meter" | "meters" | "metre" | "metres" => LenUnit::M,
        "in" | "inch" | "inches" | "\"" | "''" => LenUnit::In,
        "ft" | "foot" | "feet" | "'" => LenUnit::Ft,
        _ => return None,
    })
}

/// Reads a length with its unit: `168 cm`, `1.68 m`, `66 in`, `66"`, `5 ft 6 in`, `5 ft`,
/// `5'6"`, `5' 6`, `5 feet 6 inches`. A bare number is refused: `168` could be cm or in.
pub fn parse_length(text: &str) -> Result<Length, QuantityError> {
    let norm = text
        .trim()
        .to_lowercase()
        .replace(['′', '’'], "'")
        .replace(['″', '”', '“'], "\"");
    if norm.is_empty() {
        return Err(qerr("no height given"));
    }
    // Split into (number, unit) pairs.
    let mut pairs: Vec<(String, String)> = Vec::new();
    let chars: Vec<char> = norm.chars().collect();
    let mut i = 0;
    while i < chars.len() {
        while i < chars.len() && chars[i].is_whitespace() {
            i += 1;
        }
        if i >= chars.len() {
            break;
        }
        let start = i;
        // The number as one token, exponent and `nan`/`inf` included: `1e400 cm` is an
        // out-of-range number, not the number 1 with a unit `e`.
        let rest = &norm[byte_at(&norm, start)..];
        i += rest[..number_prefix_len(rest)].chars().count();
        let num: String = chars[start..i].iter().collect();
        if num.is_empty() {
            return Err(qerr(format!(
                "expected a number at `{}`",
                &norm[byte_at(&norm, start)..]
            )));
        }
        while i < chars.len() && chars[i].is_whitespace() {
            i += 1;
        }
        let ustart = i;
        if i < chars.len() && (chars[i] == '\'' || chars[i] == '"') {
            i += 1;
            if chars[i - 1] == '\'' && i < chars.len() && chars[i] == '\'' {
                i += 1; // two single quotes used as an inch mark
            }
        } else {
            while i < chars.len() && chars[i].is_alphabetic() {
                i += 1;
            }
        }
        let unit: String = chars[ustart..i].iter().collect();
        pairs.push((num, unit));
    }
    let mut values = Vec::new();
    for (num, unit) in &pairs {
        let v = match parse_decimal(num) {
            Ok(v) => v,
            Err(NumberError::DecimalComma) => {
                return Err(QuantityError {
                    message: format!("`{num}` has a decimal comma"),
                    hint: format!("write `{}` with a decimal point", num.replace(',', ".")),
                });
            }
            Err(e) => {
                return Err(QuantityError {
                    message: e.describe(num),
                    hint: "write the height as a plain number with its unit: `168 cm`, \
                           `1.68 m`, `66 in` or `5 ft 6 in`"
                        .into(),
                });
            }
        };
        let u = if unit.is_empty() {
            None
        } else {
            Some(len_unit(unit).ok_or_else(|| qerr(format!("unknown unit `{unit}`")))?)
        };
        values.push((v, u));
    }
    if let [(ft, Some(LenUnit::Ft)), ..] = values.as_slice()
        && let Some(e) = decimal_feet_problem(&pairs[0].0, *ft, values.len() > 1)
    {
        return Err(e);
    }
    let len = match values.as_slice() {
        [(_, None)] => {
            return Err(qerr(format!("`{}` has no unit", text.trim())));
        }
        [(v, Some(LenUnit::Cm))] => Length::from_cm(*v),
        [(v, Some(LenUnit::M))] => Length::from_cm(v * 100.0),
        [(v, Some(LenUnit::In))] => Length::from_in(*v),
        [(v, Some(LenUnit::Ft))] => Length::from_ft_in(*v, 0.0),
        // `5 ft 6 in`, `5'6"` and, as people also write it, `5'6` or `5 ft 6`.
        [(ft, Some(LenUnit::Ft)), (inch, Some(LenUnit::In) | None)] => {
            if *inch >= 12.0 {
                return Err(qerr(format!(
                    "{inch} inches is a foot or more; write feet and inches"
                )));
            }
            Length::from_ft_in(*ft, *inch)
        }
        _ => return Err(qerr(format!("cannot read `{}` as a length", text.trim()))),
    };
    Ok(len)
}

/// Why a number of feet written with decimals (`num`, read as `ft`) is not taken as decimal
/// feet, or `None` when it may be.
///
/// `5.11 ft` is 5 ft 11 in (180.3 cm) to most people who write it, and 5.11 feet (155.8 cm)
/// read literally; a BMI from the wrong one is off by a third (80 kg: 24.6 or 33.0), enough to
/// advise a person of healthy weight to lose. `5.5 ft` is 5 ft 5 in in some places and 5 ft 6
/// in in others. As with stones and pounds (`14.12 st`), a value that reads both ways is not
/// guessed: decimals that could be inches (a whole number of 0 to 11 after the point, and not
/// all zeros) are refused with both readings, and feet with decimals before inches (`5.5 ft
/// 2 in`) are refused too. `5.75 ft` (75 is no number of inches) and `6.0 ft` are read.
fn decimal_feet_problem(num: &str, ft: f64, with_inches: bool) -> Option<QuantityError> {
    let (whole, decimals) = num.trim().split_once('.')?;
    let as_inches: u32 = decimals.parse().ok()?;
    if with_inches && ft.fract() != 0.0 {
        return Some(QuantityError {
            message: format!("`{num}` feet with decimals, then inches"),
            hint: "write whole feet and inches (`5 ft 6 in`), or the height in cm".into(),
        });
    }
    if as_inches == 0 || as_inches > 11 {
        return None;
    }
    let feet: f64 = whole.parse().ok()?;
    let both = Length::from_ft_in(feet, f64::from(as_inches));
    Some(QuantityError {
        message: format!(
            "`{num} ft` could be {whole} ft {as_inches} in ({:.1} cm) or {num} feet ({:.1} cm)",
            both.cm(),
            Length::from_ft_in(ft, 0.0).cm()
        ),
        hint: format!("write feet and inches (`{whole} ft {as_inches} in`), or the height in cm"),
    })
}

fn byte_at(s: &str, char_index: usize) -> usize {
    s.char_indices().nth(char_index).map_or(s.len(), |(b, _)| b)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cm(s: &str) -> f64 {
        parse_length(s)
            .unwrap_or_else(|e| panic!("{s}: {e:?}"))
            .cm()
    }

    #[test]
    fn thousands_separators_as_spreadsheets_export_them() {
        // Both separators, a repeated one or spaces: thousands in any column.
        assert_eq!(parse_grouped("1.850,5", false), Some(1850.5));
        assert_eq!(parse_grouped("1,850.5", false), Some(1850.5));
        assert_eq!(parse_grouped("-1.234.567", false), Some(-1_234_567.0));
        assert_eq!(parse_grouped("12 500", false), Some(12_500.0));
        // One `.` or `,` and three digits: thousands only where values are whole numbers.
        assert_eq!(parse_grouped("1.850", true), Some(1850.0));
        assert_eq!(parse_grouped("1,850", true), Some(1850.0));
        assert_eq!(parse_grouped("72.500", false), None);
        assert_eq!(parse_grouped("72,500", false), None);
        // Not grouped: decimals, a first group of four or starting with 0, groups of two.
        for s in [
            "72.5",
            "1850",
            "0.850",
            "0,850",
            "1850.000",
            "1.85",
            "1.85.000",
            "12,50,000",
            "1.850,",
            "a.850",
        ] {
            assert_eq!(parse_grouped(s, true), None, "{s}");
        }
    }

    #[test]
    fn weights_with_their_units_in_the_cell() {
        use WrittenMass::*;
        assert_eq!(split_mass("72.5 kg"), Some(One("72.5", Some(MassUnit::Kg))));
        assert_eq!(split_mass("72.4kg"), Some(One("72.4", Some(MassUnit::Kg))));
        assert_eq!(
            split_mass(" 72.2 KG "),
            Some(One("72.2", Some(MassUnit::Kg)))
        );
        assert_eq!(
            split_mass("160.4 lb"),
            Some(One("160.4", Some(MassUnit::Lb)))
        );
        assert_eq!(split_mass("160 lbs"), Some(One("160", Some(MassUnit::Lb))));
        assert_eq!(
            split_mass("159.8 Lbs."),
            Some(One("159.8", Some(MassUnit::Lb)))
        );
        assert_eq!(split_mass("11.5 st"), Some(One("11.5", Some(MassUnit::St))));
        assert_eq!(split_mass("72,5 kg"), Some(One("72,5", Some(MassUnit::Kg))));
        assert_eq!(split_mass("72500 g"), Some(One("72500", Some(MassUnit::G))));
        assert_eq!(split_mass("72500g"), Some(One("72500", Some(MassUnit::G))));
        assert_eq!(MassUnit::parse("Grams"), Some(MassUnit::G));
        assert_eq!(split_mass("72.5"), Some(One("72.5", None)));
        assert_eq!(split_mass("14 st 2 lb"), Some(StonesPounds("14", "2")));
        assert_eq!(split_mass("14st 2lb"), Some(StonesPounds("14", "2")));
        assert_eq!(split_mass("14 st 2"), Some(StonesPounds("14", "2")));
        assert_eq!(
            split_mass("14 stone 2.5 pounds"),
            Some(StonesPounds("14", "2.5"))
        );
        assert_eq!(split_mass("72.5 kgm"), Some(UnknownUnit("kgm")));
        // Not numbers with units: left to the number reader, which names what it found.
        for s in ["kg", "72 kg 3 lb", "14 lb 2 st", "n/a", "72 kg!", ""] {
            assert_eq!(split_mass(s), None, "{s}");
        }
    }

    #[test]
    fn durations_as_activity_apps_write_them() {
        use WrittenDuration::*;
        assert_eq!(split_duration("00:45:00"), Clock(45.0));
        assert_eq!(split_duration("1:10:00"), Clock(70.0));
        assert_eq!(split_duration("0:30:30"), Clock(30.5));
        assert_eq!(split_duration("45 min"), Units(45.0, Some("min")));
        assert_eq!(split_duration("30 mins"), Units(30.0, Some("min")));
        assert_eq!(split_duration("1 h 15 min"), Units(75.0, None));
        assert_eq!(split_duration("1h15m"), Units(75.0, None));
        assert_eq!(split_duration("1.5 hours"), Units(90.0, Some("h")));
        assert_eq!(split_duration("1h"), Units(60.0, Some("h")));
        assert_eq!(split_duration("45"), Plain("45"));
        assert_eq!(split_duration("45:00"), Ambiguous(45.0, 0.0));
        assert_eq!(split_duration("1:30"), Ambiguous(1.0, 30.0));
        assert_eq!(split_duration("1:75"), Other);
        for s in [
            "00:75:00",
            "15 min 1 h",
            "45 furlongs",
            "1 h 1 h",
            "abc",
            "1::2",
        ] {
            assert_eq!(split_duration(s), Other, "{s}");
        }
    }

    #[test]
    fn heights_in_every_written_form() {
        // 1 in = 2.54 cm exactly (international yard and pound agreement, 1959).
        let five_six = 66.0 * 2.54;
        for s in [
            "5 ft 6 in",
            "5ft 6in",
            "5'6\"",
            "5' 6\"",
            "5'6",
            "5 feet 6 inches",
            "5 ft 6",
            "5′6″",
            "66 in",
            "66\"",
            "66 inches",
        ] {
            assert!((cm(s) - five_six).abs() < 1e-9, "{s}");
        }
        assert_eq!(cm("168 cm"), 168.0);
        assert_eq!(cm("168cm"), 168.0);
        assert!((cm("1.68 m") - 168.0).abs() < 1e-9);
        assert!((cm("6 ft") - 182.88).abs() < 1e-9);
        assert_eq!(cm(" 170.5 CM "), 170.5);
        // Decimal feet that cannot be feet and inches, or are whole feet, are read.
        assert!((cm("5.75 ft") - 69.0 * 2.54).abs() < 1e-9);
        assert!((cm("6.0 ft") - 182.88).abs() < 1e-9);
    }

    /// `5.11 ft` was read as 5.11 feet, 155.8 cm, where most who write it mean 5 ft 11 in
    /// (180.3 cm): at 80 kg a BMI of 33.0 instead of 24.6, and loss advice for a person of
    /// healthy weight. Decimals that could be inches are not guessed, as for stones.
    #[test]
    fn decimal_feet_that_could_be_feet_and_inches_are_refused() {
        let e = parse_length("5.11 ft").unwrap_err();
        assert_eq!(
            e.message,
            "`5.11 ft` could be 5 ft 11 in (180.3 cm) or 5.11 feet (155.8 cm)"
        );
        assert!(e.hint.contains("`5 ft 11 in`"), "{e:?}");
        for s in ["5.5 ft", "5.10'", "5.1 feet", "5.05 ft", "5.6ft"] {
            assert!(parse_length(s).is_err(), "{s}");
        }
        let e = parse_length("5.5 ft 2 in").unwrap_err();
        assert!(
            e.message.contains("feet with decimals, then inches"),
            "{e:?}"
        );
    }

    #[test]
    fn bare_numbers_and_bad_units_are_refused() {
        let e = parse_length("168").unwrap_err();
        assert!(e.message.contains("no unit"), "{e:?}");
        assert!(e.hint.contains("168 cm"));
        assert!(
            parse_length("168 furlongs")
                .unwrap_err()
                .message
                .contains("unknown unit")
        );
        assert!(parse_length("tall").is_err());
        assert!(parse_length("").is_err());
        assert!(
            parse_length("5 ft 14 in")
                .unwrap_err()
                .message
                .contains("a foot or more")
        );
        assert!(parse_length("168 cm 5 in").is_err());
        let e = parse_length("1,68 m").unwrap_err();
        assert!(e.hint.contains("1.68"), "{e:?}");
    }

    #[test]
    fn out_of_range_and_other_number_forms_are_named_not_taken_for_units() {
        // Was "unknown unit `e`": the number was cut at the `e`.
        let e = parse_length("1e400 cm").unwrap_err();
        assert_eq!(e.message, "`1e400` is out of range (not a finite number)");
        let e = parse_length("1e5cm").unwrap_err();
        assert_eq!(e.message, "`1e5` is in exponent notation");
        let e = parse_length("NaN cm").unwrap_err();
        assert_eq!(e.message, "`nan` is not a finite number");
        let e = parse_length("inf m").unwrap_err();
        assert_eq!(e.message, "`inf` is not a finite number");
        let e = parse_length("1,5 m").unwrap_err();
        assert!(e.message.contains("decimal comma"), "{e:?}");
        // A sign is part of the number (the height range check then refuses it).
        assert_eq!(cm("-0 cm"), 0.0);
        assert_eq!(cm("-5 cm"), -5.0);
        assert_eq!(number_prefix_len("1e400 cm"), 5);
        assert_eq!(number_prefix_len("12 in"), 2);
        assert_eq!(number_prefix_len("5e"), 1);
        assert_eq!(number_prefix_len("inches"), 0);
        assert_eq!(number_prefix_len("info"), 0);
        // A character of several bytes where a word is looked for (it panicked).
        assert_eq!(number_prefix_len("ñññ"), 0);
        assert_eq!(number_prefix_len("-ñaaaaaa"), 0);
        assert_eq!(split_mass("72 ñññ"), Some(WrittenMass::UnknownUnit("ñññ")));
    }

    #[test]
    fn decimals() {
        assert_eq!(parse_decimal("72.5"), Ok(72.5));
        assert_eq!(parse_decimal(" 72 "), Ok(72.0));
        assert_eq!(parse_decimal("-3"), Ok(-3.0));
        assert_eq!(parse_decimal(".5"), Ok(0.5));
        assert_eq!(parse_decimal("72,5"), Err(NumberError::DecimalComma));
        assert_eq!(parse_decimal("1,200"), Err(NumberError::DecimalComma));
        assert_eq!(parse_decimal(""), Err(NumberError::Empty));
        for bad in ["72kg", "7.2.1", "-", ".", "n/a", "1e5kg", "e5"] {
            assert_eq!(parse_decimal(bad), Err(NumberError::NotANumber), "{bad}");
        }
        for (bad, why) in [
            ("nan", NumberError::NotFinite),
            ("NaN", NumberError::NotFinite),
            ("-inf", NumberError::NotFinite),
            ("Infinity", NumberError::NotFinite),
            ("1e3", NumberError::Exponent),
            ("1E-3", NumberError::Exponent),
            ("1e400", NumberError::OutOfRange),
            ("-1e400", NumberError::OutOfRange),
            ("1e-400", NumberError::OutOfRange),
        ] {
            assert_eq!(parse_decimal(bad), Err(why), "{bad}");
        }
        // 400 digits parse to infinity: out of range, not a value.
        assert_eq!(
            parse_decimal(&format!("1{}", "0".repeat(400))),
            Err(NumberError::OutOfRange)
        );
        // `-0` is 0, never a negative zero.
        let z = parse_decimal("-0").unwrap();
        assert_eq!(z, 0.0);
        assert!(z.is_sign_positive());
        assert!(NumberError::DecimalComma.hint().contains("72.5"));
    }
}

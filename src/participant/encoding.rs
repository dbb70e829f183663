//! Files saved in a legacy 8-bit encoding: Windows-1252 (a superset of Latin-1, ISO 8859-1, in
//! its printable range), what spreadsheet and text tools in Western European locales write by
//! default. A file that is not UTF-8 is read this way only when that is unambiguous.

/// Windows-1252 bytes 0x80–0x9F (WHATWG Encoding Standard, index windows-1252); `None` where
/// the code page defines no character.
const CP1252_HIGH: [Option<char>; 32] = [
    Some('€'),
    None,
    Some('‚'),
    Some('ƒ'),
    Some('„'),
    Some('…'),
    Some('†'),
    Some('‡'),
    Some('ˆ'),
    Some('‰'),
    Some('Š'),
    Some('‹'),
    Some('Œ'),
    None,
    Some('Ž'),
    None,
    None,
    Some('‘'),
    Some('’'),
    Some('“'),
    Some('”'),
    Some('•'),
    Some('–'),
    Some('—'),
    Some('˜'),
    Some('™'),
    Some('š'),
    Some('›'),
    Some('œ'),
    None,
    Some('ž'),
    Some('Ÿ'),
];

/// Punctuation and symbols a profile or CSV file plausibly holds besides letters.
const PLAUSIBLE_SYMBOLS: &str = "€‚„…‘’“”•–—™°·§´¨ª«»º±²³µ¼½¾×÷£¥¢©®\u{a0}";

/// Decodes `bytes` as Windows-1252. Unambiguous means: no byte the code page leaves undefined,
/// no control character other than tab and line ends (a UTF-16 file has many NULs), and every
/// non-ASCII character a letter or a common symbol (text in another 8-bit code page, such as
/// Cyrillic or Greek, would decode to symbol soup). Returns the text and a list of the
/// non-ASCII characters found (for the warning), or why it is refused.
pub fn decode_legacy(bytes: &[u8]) -> Result<(String, String), String> {
    let mut out = String::with_capacity(bytes.len() + bytes.len() / 8);
    let mut seen: Vec<char> = Vec::new();
    for &b in bytes {
        let c = match b {
            0x80..=0x9F => CP1252_HIGH[usize::from(b - 0x80)].ok_or_else(|| {
                format!("the file is neither UTF-8 nor Windows-1252 (byte 0x{b:02X} has no character in either)")
            })?,
            _ => char::from(b),
        };
        if c.is_control() && !matches!(c, '\t' | '\n' | '\r') {
            return Err(format!(
                "the file holds control characters (byte 0x{b:02X}); it may be UTF-16 or binary"
            ));
        }
        if !c.is_ascii() {
            if !(c.is_alphabetic() || PLAUSIBLE_SYMBOLS.contains(c)) {
                return Err(format!(
                    "the file is not UTF-8, and read as Windows-1252 it gives the unlikely character `{c}`, so its encoding cannot be told"
                ));
            }
            if !seen.contains(&c) {
                seen.push(c);
            }
        }
        out.push(c);
    }
    let shown: Vec<String> = seen.iter().take(6).map(|c| format!("`{c}`")).collect();
    Ok((out, shown.join(", ")))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn western_european_text_decodes() {
        // "Zoë Müller" with ë = 0xEB, ü = 0xFC (ISO 8859-1 / Windows-1252), ’ = 0x92 (1252).
        let (t, chars) = decode_legacy(b"name: Zo\xEB M\xFCller\nnote: Dana\x92s\n").unwrap();
        assert_eq!(t, "name: Zoë Müller\nnote: Dana’s\n");
        assert_eq!(chars, "`ë`, `ü`, `’`");
    }

    #[test]
    fn ambiguous_or_binary_bytes_are_refused() {
        assert!(decode_legacy(b"id: P1\x81\n").unwrap_err().contains("0x81"));
        assert!(decode_legacy(b"i\0d\0").unwrap_err().contains("control"));
        // Cyrillic text in code page 1251 ("Иван" = C8 E2 E0 ED) reads as Latin letters in
        // 1252, which cannot be told apart; but 1251's "№" (0xB9) gives `¹`, refused.
        assert!(decode_legacy(b"\xB9 5").is_err());
    }
}

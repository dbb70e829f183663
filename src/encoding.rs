//! How input files are decoded besides UTF-8: UTF-16 (with a byte-order mark, or without one
//! when its bytes show it), for every input file alike (participants' files and program.yaml);
//! and, for participants' files, a legacy 8-bit encoding: Windows-1252 (a superset of Latin-1, ISO 8859-1, in
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

/// The character Windows-1252 gives byte `b`, when it gives one.
pub fn cp1252_char(b: u8) -> Option<char> {
    match b {
        0x80..=0x9F => CP1252_HIGH[usize::from(b - 0x80)],
        _ => Some(char::from(b)),
    }
}

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
        let c = cp1252_char(b).ok_or_else(|| {
            format!("the file is neither UTF-8 nor Windows-1252 (byte 0x{b:02X} has no character in either)")
        })?;
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

/// Decodes a file that starts with a UTF-16 byte-order mark (`FF FE` little-endian, `FE FF`
/// big-endian; Unicode Standard §3.10): what spreadsheets write as "Unicode text" and some
/// clinic systems export. `None` without such a mark; otherwise the text (without the mark) and
/// the byte order's name, or why it is refused: an odd number of bytes, a lone surrogate, or a
/// control character other than tab and line ends (a UTF-32 file, or binary data).
///
/// A file without the mark is UTF-16 too when its bytes show it ([`unmarked_utf16`]: its line
/// ends, `0A 00` or `00 0A`, in any script; in a file of one line, a zero byte in nearly every
/// pair at the same end), as some exporters and scripts write it; UTF-8 and Windows-1252 text
/// never holds a zero byte.
pub fn decode_utf16(bytes: &[u8]) -> Option<Result<(String, &'static str), String>> {
    let (rest, little, order) = match bytes {
        [0xFF, 0xFE, rest @ ..] => (rest, true, "UTF-16 little-endian"),
        [0xFE, 0xFF, rest @ ..] => (rest, false, "UTF-16 big-endian"),
        _ => match unmarked_utf16(bytes)? {
            true => (
                bytes,
                true,
                "UTF-16 little-endian (without a byte-order mark)",
            ),
            false => (
                bytes,
                false,
                "UTF-16 big-endian (without a byte-order mark)",
            ),
        },
    };
    Some((|| {
        if rest.len() % 2 != 0 {
            return Err(format!(
                "the file starts as {order} text but has an odd number of bytes; it is cut off or not text"
            ));
        }
        let units = rest.chunks_exact(2).map(|p| {
            if little {
                u16::from_le_bytes([p[0], p[1]])
            } else {
                u16::from_be_bytes([p[0], p[1]])
            }
        });
        let mut out = String::with_capacity(rest.len() / 2);
        for c in char::decode_utf16(units) {
            let c = c.map_err(|e| {
                format!(
                    "the file starts as {order} text but holds a lone surrogate (0x{:04X})",
                    e.unpaired_surrogate()
                )
            })?;
            if c.is_control() && !matches!(c, '\t' | '\n' | '\r') {
                return Err(format!(
                    "the file starts as {order} text but holds control characters (U+{:04X}); it may be UTF-32 or binary",
                    u32::from(c)
                ));
            }
            out.push(c);
        }
        Ok((out, order))
    })())
}

/// Whether `bytes` (with no byte-order mark) are UTF-16 text, and in which byte order
/// (`Some(true)`: little-endian). Two signs, either of which tells:
///
/// - The line ends, whatever the script. A line feed, U+000A, is the pair `0A 00` in
///   little-endian and `00 0A` in big-endian (at an even offset); read in the other order
///   either pair is U+0A00, which Unicode leaves unassigned (Python 3.11 `unicodedata`, Unicode
///   14.0.0: category Cn), so text of any script holds line ends of one order only. Line ends
///   of exactly one order (at least one), no pair `00 00` (U+0000: UTF-32 or binary data),
///   and at least as many ASCII characters in that order as lines (every line of our files has
///   dates, delimiters or keys) give that order. UTF-8 and Windows-1252 text never holds a zero
///   byte, so neither pair.
/// - Without a line end (a file of one line): the first character is ASCII, and in the first
///   4 KiB nearly every pair of bytes has its zero byte at the one end (at least 90 % of the
///   pairs, and at most 5 % at the other end: characters such as `Ā`, U+0100, have a zero low
///   byte): text of Latin letters, digits and punctuation.
///
/// Neither is a silent guess: the file is then decoded strictly in that order (a lone
/// surrogate or a control character refuses it), `check` and the data-quality notes say how it
/// was read, and a CSV file's header must still name its columns.
fn unmarked_utf16(bytes: &[u8]) -> Option<bool> {
    // UTF-8 and Windows-1252 text (nearly every file) hold no zero byte: nothing to look at.
    if !bytes.contains(&0) {
        return None;
    }
    let ascii = |b: u8| b.is_ascii_graphic() || b == b' ';
    let (mut le_ends, mut be_ends, mut nul) = (0usize, 0usize, false);
    let (mut le_ascii, mut be_ascii) = (0usize, 0usize);
    for p in bytes.chunks_exact(2) {
        match *p {
            [0x0A, 0x00] => le_ends += 1,
            [0x00, 0x0A] => be_ends += 1,
            // U+0000 in either order: UTF-32 or binary data, not UTF-16 text.
            [0x00, 0x00] => nul = true,
            [b, 0x00] if ascii(b) => le_ascii += 1,
            [0x00, b] if ascii(b) => be_ascii += 1,
            _ => {}
        }
    }
    match (le_ends, be_ends) {
        _ if nul => {}
        (n, 0) if n > 0 && le_ascii >= n => return Some(true),
        (0, n) if n > 0 && be_ascii >= n => return Some(false),
        // No line end, or both orders' (not UTF-16 text), or lines without the ASCII our
        // files have on every line (dates, delimiters, keys): a stray zero byte beside a
        // line feed in a damaged file.
        _ => {}
    }
    let sample = &bytes[..bytes.len().min(4096) & !1];
    if sample.len() < 4 {
        return None;
    }
    let pairs = sample.len() / 2;
    let zero_at = |i: usize| sample.chunks_exact(2).filter(|p| p[i] == 0).count();
    let (low, high) = (zero_at(0), zero_at(1));
    let mostly = |n: usize| n * 10 >= pairs * 9;
    let rarely = |n: usize| n * 20 <= pairs;
    if ascii(sample[0]) && sample[1] == 0 && mostly(high) && rarely(low) {
        Some(true)
    } else if sample[0] == 0 && ascii(sample[1]) && mostly(low) && rarely(high) {
        Some(false)
    } else {
        None
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn utf16_with_a_byte_order_mark_decodes_and_without_one_is_left_alone() {
        let text = "date\tweight\tunit\r\n2026-04-01\t72,5\tkg\r\nZoë\n";
        let le: Vec<u8> = [0xFF, 0xFE]
            .into_iter()
            .chain(text.encode_utf16().flat_map(u16::to_le_bytes))
            .collect();
        let be: Vec<u8> = [0xFE, 0xFF]
            .into_iter()
            .chain(text.encode_utf16().flat_map(u16::to_be_bytes))
            .collect();
        assert_eq!(
            decode_utf16(&le),
            Some(Ok((text.to_string(), "UTF-16 little-endian")))
        );
        assert_eq!(
            decode_utf16(&be),
            Some(Ok((text.to_string(), "UTF-16 big-endian")))
        );
        assert_eq!(decode_utf16(text.as_bytes()), None);
        // Cut off in the middle of a character, UTF-32 (its NULs), a lone surrogate.
        assert!(decode_utf16(&le[..le.len() - 1]).unwrap().is_err());
        assert!(
            decode_utf16(b"\xFF\xFE\0\0d\0\0\0")
                .unwrap()
                .unwrap_err()
                .contains("control")
        );
        assert!(
            decode_utf16(b"\xFF\xFE\x00\xD8a\0")
                .unwrap()
                .unwrap_err()
                .contains("surrogate")
        );
    }

    /// A UTF-16 export without the mark was read as UTF-8: its header `d\0a\0t\0e\0…` named no
    /// column, and the file was refused as "missing required columns", quoting the NULs.
    #[test]
    fn utf16_without_a_byte_order_mark_is_recognised_by_its_zero_bytes() {
        let text = "date,weight,unit\r\n2026-04-01,72.5,kg\r\n2026-04-02,Ā 72.4,kg\r\n";
        let le: Vec<u8> = text.encode_utf16().flat_map(u16::to_le_bytes).collect();
        let be: Vec<u8> = text.encode_utf16().flat_map(u16::to_be_bytes).collect();
        assert_eq!(
            decode_utf16(&le),
            Some(Ok((
                text.to_string(),
                "UTF-16 little-endian (without a byte-order mark)"
            )))
        );
        assert_eq!(
            decode_utf16(&be),
            Some(Ok((
                text.to_string(),
                "UTF-16 big-endian (without a byte-order mark)"
            )))
        );
        // UTF-32 has zero bytes at both ends: not taken for UTF-16 (its NULs are refused).
        let utf32: Vec<u8> = text
            .chars()
            .flat_map(|c| (c as u32).to_le_bytes())
            .collect();
        assert_eq!(decode_utf16(&utf32), None);
        // Text without zero bytes, a file of a few bytes, and other scripts are left alone.
        assert_eq!(decode_utf16(b"date,weight\n"), None);
        assert_eq!(decode_utf16(b"d\0"), None);
        let greek: Vec<u8> = "ημερομηνία,βάρος"
            .encode_utf16()
            .flat_map(u16::to_le_bytes)
            .collect();
        assert_eq!(decode_utf16(&greek), None);
    }

    /// Without a mark, only text that was nearly all Latin was recognised (90 % of the pairs
    /// with a zero byte): a profile with a Greek name, session names in Cyrillic or a note in
    /// Chinese were refused. The line ends tell the byte order in any script.
    #[test]
    fn utf16_without_a_byte_order_mark_in_other_scripts_is_recognised_by_its_line_ends() {
        for text in [
            "id: P1\nname: \"Αικατερίνη Παπαδοπούλου\"\n# Καρτέλα συμμετέχοντος\n",
            "date,session,attended\r\n2026-04-07,Занятие «Отправная точка»,yes\r\n",
            "date,activity,minutes\n2026-04-07,太极拳（杨式）晨练,30\n",
        ] {
            let le: Vec<u8> = text.encode_utf16().flat_map(u16::to_le_bytes).collect();
            let be: Vec<u8> = text.encode_utf16().flat_map(u16::to_be_bytes).collect();
            assert_eq!(
                decode_utf16(&le),
                Some(Ok((
                    text.to_string(),
                    "UTF-16 little-endian (without a byte-order mark)"
                ))),
                "{text}"
            );
            assert_eq!(
                decode_utf16(&be),
                Some(Ok((
                    text.to_string(),
                    "UTF-16 big-endian (without a byte-order mark)"
                ))),
                "{text}"
            );
        }
        // Line ends of both orders: not UTF-16 text.
        assert_eq!(decode_utf16(b"a\0\n\0\0\nb\0"), None);
        // A damaged UTF-8 file with a zero byte beside a line feed is not taken for UTF-16
        // (its lines have no ASCII in that reading), and is refused by the UTF-8 reading.
        assert_eq!(decode_utf16("Zoë M\0\nxx,yy\n".as_bytes()), None);
    }

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

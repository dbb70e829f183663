//! Text from inputs as the reports show it: the invisible characters that change how the text
//! around them is ordered or shown ([`is_invisible_control`]) and the one function that drops
//! them ([`neutralise`]), used by the report escaping, the charts, the PDF and the CSV writer;
//! the participant reader warns about them where they are written.

use std::borrow::Cow;

/// Whether `c` is a character that changes how the text around it is ordered or shown without
/// being seen itself: the bidirectional embeddings, overrides and isolates (U+202A–U+202E,
/// U+2066–U+2069), the direction marks (U+200E, U+200F, U+061C) and the other invisible format
/// controls of that block (U+206A–U+206F), the byte-order mark used as a zero-width no-break
/// space (U+FEFF), and the C0 and C1 control characters (the Unicode Standard, chapter 23 and
/// UAX #9, "Unicode Bidirectional Algorithm"; the "Trojan Source" reordering, CVE-2021-42574).
/// Tab and line ends are ordinary white space.
pub fn is_invisible_control(c: char) -> bool {
    matches!(c,
        '\u{202a}'..='\u{202e}'
        | '\u{2066}'..='\u{2069}'
        | '\u{206a}'..='\u{206f}'
        | '\u{200e}' | '\u{200f}' | '\u{061c}' | '\u{feff}')
        || (c.is_control() && !matches!(c, '\t' | '\n' | '\r'))
}

/// Whether `c` is a default-ignorable code point: one a text shows as nothing unless a font
/// or a script gives it a use (soft hyphen, zero-width space and joiners, word joiner,
/// variation selectors, the Hangul fillers, tags …). The ranges of the
/// `Default_Ignorable_Code_Point` property (Unicode, DerivedCoreProperties.txt; from memory).
pub fn is_default_ignorable(c: char) -> bool {
    matches!(c,
        '\u{00ad}' | '\u{034f}' | '\u{061c}' | '\u{115f}'..='\u{1160}' | '\u{17b4}'..='\u{17b5}'
        | '\u{180b}'..='\u{180f}' | '\u{200b}'..='\u{200f}' | '\u{202a}'..='\u{202e}'
        | '\u{2060}'..='\u{206f}' | '\u{3164}' | '\u{fe00}'..='\u{fe0f}' | '\u{feff}'
        | '\u{ffa0}' | '\u{fff0}'..='\u{fff8}' | '\u{1bca0}'..='\u{1bca3}'
        | '\u{1d173}'..='\u{1d17a}' | '\u{e0000}'..='\u{e0fff}')
}

/// The form in which two texts from inputs that a reader cannot tell apart compare equal:
/// compatibility-composed (NFKC: `Ｋｉｌｎ` and `Kiln`, a precomposed `í` and `i` plus a
/// combining accent), default-ignorable code points dropped ([`is_default_ignorable`]: a
/// zero-width space pasted from a web page), lower case, white space collapsed to one space and
/// trimmed. This is Unicode's comparison of identifiers, NFKC_Casefold (UAX #31, UAX #44; from
/// memory), with lower-casing for case folding.
pub fn fold_for_comparison(s: &str) -> String {
    use unicode_normalization::UnicodeNormalization;
    let kept: String = s
        .nfkc()
        .filter(|&c| !is_default_ignorable(c))
        .collect::<String>()
        .to_lowercase();
    kept.split_whitespace().collect::<Vec<_>>().join(" ")
}

/// Text from inputs made safe to show: every [`is_invisible_control`] character is dropped (a
/// participant's name can then no longer reorder the text around it, nor hide part of itself),
/// the other characters are kept as written. The one function the HTML escaping, the SVG charts
/// and the PDF text all go through; names are also isolated in the templates (`<bdi>`), so a
/// name in a right-to-left script keeps its own order without turning its neighbours round.
pub fn neutralise(s: &str) -> Cow<'_, str> {
    if s.chars().any(is_invisible_control) {
        s.chars()
            .filter(|&c| !is_invisible_control(c))
            .collect::<String>()
            .into()
    } else {
        s.into()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn direction_controls_and_control_characters_are_dropped() {
        // U+202E turns "Ann\u{202e}txt.exe" into "Annexe.txt" on screen.
        assert_eq!(neutralise("Ann\u{202e}exe.txt"), "Annexe.txt");
        for c in [
            '\u{202a}', '\u{202b}', '\u{202c}', '\u{202d}', '\u{202e}', '\u{2066}', '\u{2067}',
            '\u{2068}', '\u{2069}', '\u{200e}', '\u{200f}', '\u{061c}', '\u{feff}', '\u{0}',
            '\u{1b}', '\u{7f}', '\u{85}', '\u{9b}',
        ] {
            assert_eq!(neutralise(&format!("a{c}b")), "ab", "U+{:04X}", c as u32);
        }
        // Letters of every script, joiners and white space stay.
        for s in [
            "Łucja Nguyễn-Øberg",
            "سارة",
            "王小明",
            "a\tb\nc",
            "👩\u{200d}🔬",
            "می\u{200c}خواهم",
        ] {
            assert!(matches!(neutralise(s), Cow::Borrowed(_)), "{s}");
        }
    }
}

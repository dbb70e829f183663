//! Rendering layer: the chart description shared by HTML and PDF reports ([`chart`]) and the
//! PDF document model and renderer ([`pdf`]).
//!
//! Charts are drawn by one plotters function into either plotters' SVG backend (inline in HTML)
//! or our PDF backend (vector operations for printpdf). Text in both is measured with the
//! embedded DejaVu Sans faces, parsed once per process and shared across threads.

pub mod chart;
mod font;
pub mod pdf;
mod plotters_pdf;
mod tagged;

pub use crate::text::{is_invisible_control, neutralise};

/// The characters of `text` the PDF's embedded faces (DejaVu Sans, regular and bold) have no
/// glyph for, each once in order of appearance: a PDF would show them as empty boxes, and a
/// reader or screen reader gets nothing from them (most CJK, Thai, Devanagari, emoji).
/// White space and control characters are not counted (they are not drawn).
pub fn pdf_unshowable(text: &str) -> Vec<char> {
    let (regular, bold) = (
        font::face(font::Face::Regular),
        font::face(font::Face::Bold),
    );
    let mut out: Vec<char> = Vec::new();
    for c in text.chars() {
        if c.is_whitespace() || c.is_control() || is_invisible_control(c) || out.contains(&c) {
            continue;
        }
        if regular.glyph(c) == 0 || bold.glyph(c) == 0 {
            out.push(c);
        }
    }
    out
}

#[cfg(test)]
mod unshowable_tests {
    use super::*;

    #[test]
    fn the_pdf_font_shows_latin_greek_and_cyrillic_not_cjk_or_thai() {
        assert_eq!(pdf_unshowable("王小明 Wang 王"), vec!['王', '小', '明']);
        assert_eq!(pdf_unshowable("สมชาย"), "สมชาย".chars().collect::<Vec<_>>());
        assert!(pdf_unshowable("Łucja Nguyễn-Øberg Σοφία Ольга").is_empty());
        // Invisible controls are not drawn, so not counted.
        assert!(pdf_unshowable("a\u{202e}b\u{1b}").is_empty());
    }
}

//! The embedded DejaVu Sans faces: glyph metrics for text layout (PDF wrapping and chart label
//! sizes in both SVG and PDF) and per-document subsets for PDF embedding.
//!
//! Each face is parsed once per process ([`face`] keeps it in a `OnceLock`) and shared read-only
//! across rendering threads. A PDF embeds only the glyphs it uses: the whole regular face is about
//! 740 KB, a typical report's subset a few tens of KB.

use std::collections::{BTreeMap, BTreeSet, HashMap};
use std::sync::{Mutex, OnceLock};

use allsorts::binary::read::ReadScope;
use allsorts::font_data::FontData;
use allsorts::subset::{CmapTarget, SubsetProfile};

/// DejaVu Sans 2.37 (Debian fonts-dejavu-core; licence in report-templates/fonts/LICENSE).
const REGULAR_TTF: &[u8] = include_bytes!("../../report-templates/fonts/DejaVuSans.ttf");
/// DejaVu Sans Bold 2.37, same source and licence.
const BOLD_TTF: &[u8] = include_bytes!("../../report-templates/fonts/DejaVuSans-Bold.ttf");

/// Which embedded face a run of text uses.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash)]
pub(crate) enum Face {
    Regular,
    Bold,
}

impl Face {
    /// The PDF resource name the face is registered under (fixed, so output is deterministic).
    pub(crate) fn resource_name(self) -> &'static str {
        match self {
            Face::Regular => "F1",
            Face::Bold => "F2",
        }
    }

    /// The PostScript name of the face, used in the embedded font dictionary.
    pub(crate) fn postscript_name(self) -> &'static str {
        match self {
            Face::Regular => "DejaVuSans",
            Face::Bold => "DejaVuSans-Bold",
        }
    }
}

/// Metrics of one parsed face, shared by every rendering thread.
pub(crate) struct FaceMetrics {
    face: Face,
    bytes: &'static [u8],
    /// Basic Multilingual Plane codepoint → glyph id (0 = no glyph): a flat table because
    /// width measurement is the hottest path of layout.
    bmp: Vec<u16>,
    /// Codepoints beyond the BMP (rare in names, but the font has a few).
    astral: BTreeMap<u32, u16>,
    /// Glyph id → advance width in font units.
    advances: Vec<u16>,
    units_per_em: f32,
    /// printpdf's view of the full face: metrics for the font descriptor; its byte and glyph
    /// tables are left empty and filled per subset.
    template: printpdf::ParsedFont,
}

/// Tables kept in a subset: what ISO 32000-1 (9.9) asks of an embedded TrueType program (head,
/// hhea, loca, glyf, hmtx, maxp, and cvt/fpgm/prep for hinting) plus small cmap and post tables.
/// allsorts' own PDF profile also keeps `name`, 15 KB per face of copyright strings that no
/// viewer reads from an embedded font.
const PDF_TABLES: [u32; 9] = [
    allsorts::tag::CMAP,
    allsorts::tag::HEAD,
    allsorts::tag::CVT,
    allsorts::tag::FPGM,
    allsorts::tag::HHEA,
    allsorts::tag::HMTX,
    allsorts::tag::MAXP,
    allsorts::tag::POST,
    allsorts::tag::PREP,
];

static REGULAR: OnceLock<FaceMetrics> = OnceLock::new();
static BOLD: OnceLock<FaceMetrics> = OnceLock::new();

/// Subsets made so far in this process, by face and character set: reports of one run mostly
/// use the same few character sets (the regular face of the 48 sample reports has 15), and a
/// subset is a pure function of them, so a repeated set is copied instead of cut again from
/// the whole face. Bounded: emptied when it holds [`SUBSET_CACHE_MAX`] sets.
type SubsetCache = HashMap<(Face, Vec<char>), printpdf::ParsedFont>;
static SUBSETS: OnceLock<Mutex<SubsetCache>> = OnceLock::new();
/// At most this many subsets are kept (each a few tens of KB).
const SUBSET_CACHE_MAX: usize = 64;

/// The parsed face, parsed on first use and then shared.
pub(crate) fn face(face: Face) -> &'static FaceMetrics {
    match face {
        Face::Regular => REGULAR.get_or_init(|| FaceMetrics::parse(Face::Regular, REGULAR_TTF)),
        Face::Bold => BOLD.get_or_init(|| FaceMetrics::parse(Face::Bold, BOLD_TTF)),
    }
}

/// Width of `text` in points (or pixels) at font size `size`.
pub(crate) fn text_width(f: Face, text: &str, size: f32) -> f32 {
    face(f).width(text, size)
}

/// `text` as it is when it fits `max` at `size`, else cut with an ellipsis so that it does
/// (used for chart labels and table cells alike, so SVG and PDF cut at the same place).
pub(crate) fn ellipsize(f: Face, text: &str, size: f32, max: f32) -> String {
    let m = face(f);
    if m.width(text, size) <= max {
        return text.to_string();
    }
    let budget = max - m.width("…", size);
    let mut out = String::new();
    let mut used = 0.0;
    for c in text.chars() {
        let w = m.char_width(c, size);
        if used + w > budget {
            break;
        }
        used += w;
        out.push(c);
    }
    out.push('…');
    out
}

impl FaceMetrics {
    fn parse(which: Face, bytes: &'static [u8]) -> FaceMetrics {
        let mut warnings = Vec::new();
        // The fonts are compiled into the binary and checked by the tests below, so a parse
        // failure is a build defect, not a runtime condition.
        let mut parsed = printpdf::ParsedFont::from_bytes(bytes, 0, &mut warnings)
            .expect("embedded DejaVu Sans face must parse");
        let mut bmp = vec![0u16; 0x1_0000];
        let mut astral = BTreeMap::new();
        for (&cp, &gid) in &parsed.codepoint_to_glyph {
            if cp < 0x1_0000 {
                bmp[cp as usize] = gid;
            } else {
                astral.insert(cp, gid);
            }
        }
        let n_glyphs = parsed
            .glyph_widths
            .keys()
            .next_back()
            .map_or(0, |&g| g as usize + 1);
        let mut advances = vec![0u16; n_glyphs];
        for (&gid, &w) in &parsed.glyph_widths {
            advances[gid as usize] = w;
        }
        let units_per_em = f32::from(parsed.units_per_em.max(1));
        parsed.original_bytes = Vec::new();
        parsed.codepoint_to_glyph = BTreeMap::new();
        parsed.glyph_widths = BTreeMap::new();
        parsed.font_name = Some(which.postscript_name().to_string());
        FaceMetrics {
            face: which,
            bytes,
            bmp,
            astral,
            advances,
            units_per_em,
            template: parsed,
        }
    }

    /// Glyph id for a character; 0 (.notdef) when the face has none.
    pub(crate) fn glyph(&self, c: char) -> u16 {
        let cp = c as u32;
        if cp < 0x1_0000 {
            self.bmp[cp as usize]
        } else {
            self.astral.get(&cp).copied().unwrap_or(0)
        }
    }

    /// Advance width of a glyph in em units.
    fn advance_em(&self, gid: u16) -> f32 {
        f32::from(self.advances.get(gid as usize).copied().unwrap_or(0)) / self.units_per_em
    }

    /// Width of `text` at `size`: the sum of advance widths, exactly what a PDF viewer advances
    /// for the same string (no kerning or shaping on this path).
    pub(crate) fn width(&self, text: &str, size: f32) -> f32 {
        let units: u32 = text
            .chars()
            .map(|c| {
                u32::from(
                    self.advances
                        .get(self.glyph(c) as usize)
                        .copied()
                        .unwrap_or(0),
                )
            })
            .sum();
        units as f32 / self.units_per_em * size
    }

    /// Width of one character at `size`.
    pub(crate) fn char_width(&self, c: char, size: f32) -> f32 {
        self.advance_em(self.glyph(c)) * size
    }

    /// A font program holding only the glyphs for `chars` (plus .notdef), as a printpdf font
    /// whose character map and widths point at the renumbered glyphs.
    ///
    /// Glyph ids are renumbered in ascending order of the original ids, so the same character
    /// set always yields the same bytes.
    pub(crate) fn subset(&self, chars: &BTreeSet<char>) -> Result<printpdf::ParsedFont, String> {
        let key = (self.face, chars.iter().copied().collect::<Vec<char>>());
        let cache = SUBSETS.get_or_init(|| Mutex::new(HashMap::new()));
        // A poisoned lock only means another thread panicked while holding it; the map is
        // still whole (entries are inserted complete), so it is used as it is.
        if let Some(hit) = cache
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner)
            .get(&key)
        {
            return Ok(hit.clone());
        }
        let font = self.make_subset(chars)?;
        let mut map = cache
            .lock()
            .unwrap_or_else(std::sync::PoisonError::into_inner);
        if map.len() >= SUBSET_CACHE_MAX {
            map.clear();
        }
        map.insert(key, font.clone());
        Ok(font)
    }

    /// [`FaceMetrics::subset`] without the cache.
    fn make_subset(&self, chars: &BTreeSet<char>) -> Result<printpdf::ParsedFont, String> {
        let mut by_gid: BTreeMap<u16, Vec<char>> = BTreeMap::new();
        for &c in chars {
            let gid = self.glyph(c);
            if gid != 0 {
                by_gid.entry(gid).or_default().push(c);
            }
        }
        // allsorts requires .notdef first and no duplicates; the subset's glyph i is ids[i]
        // (component glyphs of composites are appended after the requested ones).
        let ids: Vec<u16> = std::iter::once(0).chain(by_gid.keys().copied()).collect();
        let font_file = ReadScope::new(self.bytes)
            .read::<FontData<'_>>()
            .map_err(|e| format!("reading embedded font: {e}"))?;
        let provider = font_file
            .table_provider(0)
            .map_err(|e| format!("reading embedded font tables: {e}"))?;
        let bytes = allsorts::subset::subset(
            &provider,
            &ids,
            &SubsetProfile::Custom(PDF_TABLES.to_vec()),
            CmapTarget::Unicode,
        )
        .map_err(|e| format!("subsetting {}: {e}", self.face.postscript_name()))?;

        let mut codepoint_to_glyph = BTreeMap::new();
        let mut glyph_widths = BTreeMap::new();
        glyph_widths.insert(0u16, self.advances.first().copied().unwrap_or(0));
        for (new_gid, (&old_gid, cs)) in (1u16..).zip(by_gid.iter()) {
            glyph_widths.insert(new_gid, self.advances[old_gid as usize]);
            for &c in cs {
                codepoint_to_glyph.insert(c as u32, new_gid);
            }
        }
        let mut font = self.template.clone();
        font.original_bytes = bytes;
        font.codepoint_to_glyph = codepoint_to_glyph;
        font.glyph_widths = glyph_widths;
        Ok(font)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn faces_parse_and_cover_european_and_vietnamese_names() {
        for f in [Face::Regular, Face::Bold] {
            let m = face(f);
            for c in "Łucja Nguyễn-Øberg Žofie Ďurková Ёлка".chars() {
                assert_ne!(m.glyph(c), 0, "{f:?} has no glyph for {c:?}");
            }
        }
    }

    #[test]
    fn widths_follow_the_font_not_the_byte_count() {
        let m = face(Face::Regular);
        // DejaVu Sans 2.37 advance widths in font units (2048/em), read with fontTools 4.68:
        // TTFont(path)['hmtx'][getBestCmap()[ord(c)]] → 'i' 569, 'M' 1767, 'ễ' 1260; bold 'M' 2038.
        assert!((m.width("i", 2048.0) - 569.0).abs() < 0.01);
        assert!((m.width("M", 2048.0) - 1767.0).abs() < 0.01);
        assert!((m.width("ễ", 2048.0) - 1260.0).abs() < 0.01);
        assert!((face(Face::Bold).width("M", 2048.0) - 2038.0).abs() < 0.01);
        // "ễ" is three UTF-8 bytes but one glyph as wide as "e".
        assert!((m.width("ễ", 10.0) - m.width("e", 10.0)).abs() < 0.01);
        // Bold is wider than regular.
        assert!(face(Face::Bold).width("Report", 10.0) > m.width("Report", 10.0));
    }

    #[test]
    fn subset_keeps_only_requested_glyphs_and_renumbers_in_order() {
        let m = face(Face::Regular);
        let chars: BTreeSet<char> = "Łucja".chars().collect();
        let sub = m.subset(&chars).unwrap();
        assert!(
            sub.original_bytes.len() < 20_000,
            "{}",
            sub.original_bytes.len()
        );
        assert_eq!(sub.codepoint_to_glyph.len(), 5);
        let mut gids: Vec<u16> = sub.codepoint_to_glyph.values().copied().collect();
        gids.sort_unstable();
        assert_eq!(gids, vec![1, 2, 3, 4, 5]);
        // Widths travel with the renumbered glyph.
        let new_l = sub.codepoint_to_glyph[&('Ł' as u32)];
        let old_l = m.glyph('Ł');
        assert_eq!(sub.glyph_widths[&new_l], m.advances[old_l as usize]);
        // Same input, same bytes.
        assert_eq!(m.subset(&chars).unwrap().original_bytes, sub.original_bytes);
        // A repeated set comes from the cache, equal to one made afresh.
        let again = m.subset(&chars).unwrap();
        let fresh = m.make_subset(&chars).unwrap();
        assert_eq!(again.original_bytes, fresh.original_bytes);
        assert_eq!(again.codepoint_to_glyph, fresh.codepoint_to_glyph);
        assert_eq!(again.glyph_widths, fresh.glyph_widths);
        // The subset is itself a parseable font.
        let mut w = Vec::new();
        assert!(printpdf::ParsedFont::from_bytes(&sub.original_bytes, 0, &mut w).is_some());
    }
}

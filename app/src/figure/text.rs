//! Text for figures: the sub/superscript markup, measurement with the embedded DejaVu Sans
//! (the same font every backend uses, so layout computed here holds in PNG, SVG and PDF) and a
//! glyph cache for raster output.
//!
//! Markup: `_x` or `_{…}` is a subscript, `^x` or `^{…}` a superscript (they nest), `\` escapes
//! the next character; inside scripts `-` becomes the minus sign U+2212. Unicode super/subscript characters (², ₀) and Greek letters are ordinary
//! glyphs. Scripts are set at [`SCRIPT_SCALE`] of the surrounding size with a baseline shift.

use std::cell::RefCell;
use std::collections::HashMap;
use std::rc::Rc;
use std::sync::OnceLock;

/// Size of a sub- or superscript relative to the text around it.
pub const SCRIPT_SCALE: f64 = 0.7;
/// Baseline raise of a superscript, as a fraction of the surrounding font size.
pub const SUPER_RAISE: f64 = 0.36;
/// Baseline drop of a subscript, as a fraction of the surrounding font size.
pub const SUB_DROP: f64 = 0.16;

/// The font all backends use: DejaVu Sans, embedded.
pub fn font() -> &'static fontdue::Font {
    static FONT: OnceLock<fontdue::Font> = OnceLock::new();
    FONT.get_or_init(|| {
        fontdue::Font::from_bytes(dejavu::sans::regular(), fontdue::FontSettings::default())
            .expect("the embedded DejaVu Sans font parses")
    })
}

/// The family name backends put into vector output.
pub const FONT_FAMILY: &str = "DejaVu Sans";

/// A piece of text at one script level: 0 normal, +1 superscript, −1 subscript, ±2 nested.
#[derive(Clone, Debug, PartialEq)]
pub struct Span {
    /// The characters.
    pub text: String,
    /// Script level path: each entry is +1 (super) or −1 (sub), outermost first.
    pub levels: Vec<i8>,
}

/// `s` as markup that shows it literally (file names in titles): `_`, `^`, `{`, `}` and `\\`
/// are escaped.
pub fn escape_markup(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        if matches!(c, '_' | '^' | '{' | '}' | '\\') {
            out.push('\\');
        }
        out.push(c);
    }
    out
}

/// Parse the markup into spans. Unbalanced braces are taken literally to the end.
pub fn parse_markup(s: &str) -> Vec<Span> {
    let chars: Vec<char> = s.chars().collect();
    let mut out = Vec::new();
    let mut pos = 0;
    parse_into(&chars, &mut pos, &mut Vec::new(), &mut out, false);
    out.retain(|s| !s.text.is_empty());
    out
}

fn push_char(out: &mut Vec<Span>, levels: &[i8], c: char) {
    match out.last_mut() {
        Some(last) if last.levels == levels => last.text.push(c),
        _ => out.push(Span {
            text: c.to_string(),
            levels: levels.to_vec(),
        }),
    }
}

fn parse_into(
    chars: &[char],
    pos: &mut usize,
    levels: &mut Vec<i8>,
    out: &mut Vec<Span>,
    in_group: bool,
) {
    while *pos < chars.len() {
        let c = chars[*pos];
        *pos += 1;
        match c {
            '\\' if *pos < chars.len() => {
                push_char(out, levels, chars[*pos]);
                *pos += 1;
            }
            '}' if in_group => return,
            '_' | '^' if *pos < chars.len() => {
                levels.push(if c == '^' { 1 } else { -1 });
                if chars[*pos] == '{' {
                    *pos += 1;
                    parse_into(chars, pos, levels, out, true);
                } else {
                    let n = chars[*pos];
                    *pos += 1;
                    push_char(out, levels, n);
                }
                levels.pop();
            }
            // In scripts an ASCII hyphen is a minus sign (cm^{-2}).
            '-' if !levels.is_empty() => push_char(out, levels, '\u{2212}'),
            _ => push_char(out, levels, c),
        }
    }
}

/// A span positioned relative to the start of the text's baseline, in pt (y positive down).
#[derive(Clone, Debug, PartialEq)]
pub struct PlacedSpan {
    /// Characters.
    pub text: String,
    /// Horizontal offset of the span's start from the text start, pt.
    pub dx: f64,
    /// Baseline offset from the main baseline, pt, positive downwards (superscripts < 0).
    pub dy: f64,
    /// Font size, pt.
    pub size: f64,
}

/// Measured, laid-out text: spans and the ink box relative to the start of the baseline.
#[derive(Clone, Debug, PartialEq)]
pub struct TextBlock {
    /// Spans in order.
    pub spans: Vec<PlacedSpan>,
    /// Advance width, pt.
    pub width: f64,
    /// Height of the ink above the baseline, pt (≥ 0).
    pub ascent: f64,
    /// Depth of the ink below the baseline, pt (≥ 0).
    pub descent: f64,
}

impl TextBlock {
    /// Total ink height, pt.
    pub fn height(&self) -> f64 {
        self.ascent + self.descent
    }
}

/// Advance width of `text` at `size` (pt), without kerning (vector output disables kerning so
/// that it matches).
pub fn advance(text: &str, size: f64) -> f64 {
    let f = font();
    text.chars()
        .map(|c| f.metrics(c, size as f32).advance_width as f64)
        .sum()
}

/// Lay out markup at base size `size` pt.
pub fn layout(markup: &str, size: f64) -> TextBlock {
    let f = font();
    let mut spans = Vec::new();
    let mut x = 0.0;
    // Reference extents so that an axis label without ascenders still reserves a digit's height.
    let digit = f.metrics('0', size as f32).bounds;
    let mut ascent = (digit.ymin + digit.height) as f64;
    let mut descent = 0.0f64;
    for span in parse_markup(markup) {
        let mut sz = size;
        let mut dy = 0.0;
        for &l in &span.levels {
            if l > 0 {
                dy -= SUPER_RAISE * sz;
            } else {
                dy += SUB_DROP * sz;
            }
            sz *= SCRIPT_SCALE;
        }
        for c in span.text.chars() {
            let m = f.metrics(c, sz as f32);
            if m.bounds.height > 0.0 {
                let top = (m.bounds.ymin + m.bounds.height) as f64 - dy;
                let bottom = -(m.bounds.ymin as f64) + dy;
                ascent = ascent.max(top);
                descent = descent.max(bottom);
            }
        }
        let w = advance(&span.text, sz);
        spans.push(PlacedSpan {
            text: span.text,
            dx: x,
            dy,
            size: sz,
        });
        x += w;
    }
    TextBlock {
        spans,
        width: x,
        ascent,
        descent,
    }
}

/// A rasterised glyph: fontdue metrics (pixel bounds, `ymin` counted up from the baseline) and
/// coverage bytes, row-major, top row first.
pub type Glyph = Rc<(fontdue::Metrics, Vec<u8>)>;

/// Glyphs kept per thread before the cache is emptied.
const GLYPH_CACHE_LIMIT: usize = 8192;

thread_local! {
    static GLYPHS: RefCell<HashMap<(char, u32), Glyph>> = RefCell::new(HashMap::new());
}

/// The glyph of `c` at `px` pixels per em, from a per-thread cache.
pub fn glyph(c: char, px: f32) -> Glyph {
    let key = (c, (px * 64.0).round() as u32);
    GLYPHS.with(|g| {
        let mut g = g.borrow_mut();
        // Continuous zooming creates new sizes every frame: keep the cache bounded.
        if g.len() >= GLYPH_CACHE_LIMIT && !g.contains_key(&key) {
            g.clear();
        }
        g.entry(key)
            .or_insert_with(|| Rc::new(font().rasterize(c, key.1 as f32 / 64.0)))
            .clone()
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn escaped_file_names_show_literally() {
        let name = r"run_07^b{2}\x.csv";
        let spans = parse_markup(&escape_markup(name));
        assert_eq!(spans.len(), 1, "{spans:?}");
        assert_eq!(spans[0].text, name);
        assert!(spans[0].levels.is_empty());
        // Unescaped, the same name would set a subscript.
        assert!(parse_markup(name).iter().any(|s| !s.levels.is_empty()));
    }

    #[test]
    fn glyph_cache_stays_bounded_and_returns_the_same_glyph() {
        let a = glyph('x', 11.0);
        let b = glyph('x', 11.0);
        assert!(Rc::ptr_eq(&a, &b));
        for k in 0..(GLYPH_CACHE_LIMIT + 100) {
            glyph('.', 4.0 + k as f32 / 64.0);
            let n = GLYPHS.with(|g| g.borrow().len());
            assert!(n <= GLYPH_CACHE_LIMIT, "{n} glyphs cached");
        }
    }

    #[test]
    fn markup_sub_and_superscripts() {
        let s = parse_markup("R_{xx} (cm^{−2})");
        let parts: Vec<(&str, Vec<i8>)> = s
            .iter()
            .map(|s| (s.text.as_str(), s.levels.clone()))
            .collect();
        assert_eq!(
            parts,
            vec![
                ("R", vec![]),
                ("xx", vec![-1]),
                (" (cm", vec![]),
                ("−2", vec![1]),
                (")", vec![]),
            ]
        );
        let n = parse_markup("x^2_i \\_a");
        assert_eq!(n[1].text, "2");
        assert_eq!(n[1].levels, vec![1]);
        assert_eq!(n[2].text, "i");
        assert_eq!(n[2].levels, vec![-1]);
        assert_eq!(n[3].text, " _a");
        let minus = parse_markup("cm^{-2} a-b");
        assert_eq!(minus[1].text, "\u{2212}2");
        assert_eq!(minus[2].text, " a-b");
        let nested = parse_markup("e^{x_{1}}");
        assert_eq!(nested[2].levels, vec![1, -1]);
        // Unicode scripts and Greek pass through as plain text.
        let u = parse_markup("φ/φ₀ ν cm⁻²");
        assert_eq!(u.len(), 1);
        assert_eq!(u[0].text, "φ/φ₀ ν cm⁻²");
    }

    #[test]
    fn scripts_are_smaller_and_shifted() {
        let b = layout("cm^{−2}", 10.0);
        assert_eq!(b.spans.len(), 2);
        assert!((b.spans[1].size - 7.0).abs() < 1e-9);
        assert!(
            b.spans[1].dy < -3.0,
            "superscript raised: {}",
            b.spans[1].dy
        );
        assert!((b.spans[1].dx - advance("cm", 10.0)).abs() < 1e-9);
        let sub = layout("R_{xx}", 10.0);
        assert!(sub.spans[1].dy > 1.0);
        // A superscript raises the ink above that of the plain text.
        assert!(b.ascent > layout("cm", 10.0).ascent);
        assert!(sub.descent > layout("R", 10.0).descent);
    }

    #[test]
    fn measurement_scales_with_size_and_length() {
        let a = layout("B (T)", 8.0);
        let b = layout("B (T)", 16.0);
        assert!((b.width / a.width - 2.0).abs() < 0.02);
        assert!(layout("10.0", 8.0).width > layout("1.0", 8.0).width);
        // DejaVu Sans digits are 0.636 em wide (font metrics).
        assert!((advance("0", 10.0) - 6.36).abs() < 0.05);
        // Greek letters and super/subscript digits have real glyphs (non-zero ink).
        for c in ['ν', 'φ', '₀', '²', 'Ω', '−'] {
            let g = glyph(c, 20.0);
            assert!(
                g.0.width > 0 && g.1.iter().any(|&v| v > 128),
                "{c} has no glyph"
            );
        }
    }
}

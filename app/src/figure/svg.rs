//! SVG backend: the display list as SVG in page pt (the document is sized in mm). The heat map
//! is an embedded PNG at the data's own resolution with `image-rendering` following the chosen
//! resampling; lines and markers are vector paths; text is real `<text>` with script spans.

use super::draw::{DisplayList, Item, Stroke};
use super::geom::Rect;
use super::heatmap;
use super::layout::layout;
use super::raster::strip_rgba;
use super::scene::{Figure, Resample};
use super::text::{TextBlock, FONT_FAMILY};
use fanmark_core::{Error, Result};
use std::fmt::Write;

fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Escape text for XML character data and attribute values.
pub fn xml_escape(s: &str) -> String {
    let mut o = String::with_capacity(s.len());
    for ch in s.chars() {
        match ch {
            '&' => o.push_str("&amp;"),
            '<' => o.push_str("&lt;"),
            '>' => o.push_str("&gt;"),
            '"' => o.push_str("&quot;"),
            '\'' => o.push_str("&apos;"),
            _ => o.push(ch),
        }
    }
    o
}

/// Standard base64 (RFC 4648) with padding.
pub fn base64(bytes: &[u8]) -> String {
    const A: &[u8; 64] = b"ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz0123456789+/";
    let mut o = String::with_capacity(bytes.len().div_ceil(3) * 4);
    for ch in bytes.chunks(3) {
        let b = [ch[0], *ch.get(1).unwrap_or(&0), *ch.get(2).unwrap_or(&0)];
        let n = (b[0] as u32) << 16 | (b[1] as u32) << 8 | b[2] as u32;
        for k in 0..4 {
            if k <= ch.len() {
                o.push(A[(n >> (18 - 6 * k) & 63) as usize] as char);
            } else {
                o.push('=');
            }
        }
    }
    o
}

fn png_of(rgba: &[u8], w: u32, h: u32) -> Result<Vec<u8>> {
    let mut png = Vec::new();
    use image::ImageEncoder;
    image::codecs::png::PngEncoder::new(&mut png)
        .write_image(rgba, w, h, image::ExtendedColorType::Rgba8)
        .map_err(|e| Error::invalid("PNG encoding", e.to_string()))?;
    Ok(png)
}

fn f(v: f64) -> String {
    let s = format!("{v:.3}");
    let s = s.trim_end_matches('0').trim_end_matches('.');
    if s == "-0" {
        "0".into()
    } else {
        s.into()
    }
}

/// Render the figure as an SVG document.
pub fn svg_string(fig: &Figure) -> Result<String> {
    let list = layout(fig)?;
    svg_from_list(fig, &list)
}

/// Write an already laid-out figure as SVG.
pub fn svg_from_list(fig: &Figure, list: &DisplayList) -> Result<String> {
    let mut s = String::new();
    let _ = writeln!(s, r#"<?xml version="1.0" encoding="UTF-8"?>"#);
    let _ = writeln!(
        s,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{}mm" height="{}mm" viewBox="0 0 {} {}">"#,
        f(fig.width_mm),
        f(fig.height_mm),
        f(list.width),
        f(list.height)
    );
    let _ = writeln!(
        s,
        r##"<rect x="0" y="0" width="{}" height="{}" fill="#ffffff"/>"##,
        f(list.width),
        f(list.height)
    );
    let mut clips: Vec<Rect> = Vec::new();
    let mut clip_id = |s: &mut String, r: &Rect| -> usize {
        if let Some(i) = clips.iter().position(|c| c == r) {
            return i;
        }
        clips.push(*r);
        let i = clips.len() - 1;
        let _ = writeln!(
            s,
            r#"<clipPath id="clip{i}"><rect x="{}" y="{}" width="{}" height="{}"/></clipPath>"#,
            f(r.x0),
            f(r.y0),
            f(r.width()),
            f(r.height())
        );
        i
    };
    for item in &list.items {
        match item {
            Item::HeatMap { panel, rect } => {
                let p = &fig.panels[*panel];
                let (Some(hm), Some(m)) = (&p.heatmap, list.mappings[*panel]) else {
                    continue;
                };
                let (Some(cx), Some(cy)) = (
                    heatmap::visible_cells(&hm.x, p.x_axis.range),
                    heatmap::visible_cells(&hm.y, p.y_axis.range),
                ) else {
                    continue;
                };
                let (xa, xb) = p.x_axis.range;
                let (ya, yb) = p.y_axis.range;
                let px = |x: f64| rect.x0 + (x - xa) / (xb - xa) * rect.width();
                let py = |y: f64| rect.y1 - (y - ya) / (yb - ya) * rect.height();
                let nx = heatmap::pixels_for_cells(&hm.x, cx.0, cx.1, (cx.2, cx.3));
                let ny = heatmap::pixels_for_cells(&hm.y, cy.0, cy.1, (cy.2, cy.3));
                // Orient the image left→right and top→bottom on the page.
                let (xl, xr) = if px(cx.2) <= px(cx.3) {
                    (cx.2, cx.3)
                } else {
                    (cx.3, cx.2)
                };
                let (yt, ybm) = if py(cy.2) <= py(cy.3) {
                    (cy.2, cy.3)
                } else {
                    (cy.3, cy.2)
                };
                let img = heatmap::render_rgba(hm, &m, (xl, xr), (yt, ybm), nx, ny);
                let png = png_of(&img, nx, ny)?;
                let id = clip_id(&mut s, rect);
                let rendering = match hm.resample {
                    Resample::Nearest => {
                        r#"image-rendering="optimizeSpeed" style="image-rendering:pixelated""#
                    }
                    Resample::Bilinear => r#"image-rendering="optimizeQuality""#,
                };
                let _ = writeln!(
                    s,
                    r#"<image clip-path="url(#clip{id})" x="{}" y="{}" width="{}" height="{}" preserveAspectRatio="none" {rendering} href="data:image/png;base64,{}"/>"#,
                    f(px(xl)),
                    f(py(yt)),
                    f(px(xr) - px(xl)),
                    f(py(ybm) - py(yt)),
                    base64(&png)
                );
            }
            Item::ColorStrip { panel, rect } => {
                let Some(hm) = &fig.panels[*panel].heatmap else {
                    continue;
                };
                let png = png_of(&strip_rgba(&hm.colors, 1, 256), 1, 256)?;
                let _ = writeln!(
                    s,
                    r#"<image x="{}" y="{}" width="{}" height="{}" preserveAspectRatio="none" image-rendering="optimizeSpeed" style="image-rendering:pixelated" href="data:image/png;base64,{}"/>"#,
                    f(rect.x0),
                    f(rect.y0),
                    f(rect.width()),
                    f(rect.height()),
                    base64(&png)
                );
            }
            Item::Path {
                points,
                closed,
                fill,
                stroke,
                clip,
            } => {
                if points.len() < 2 {
                    continue;
                }
                let clip_attr = match clip {
                    Some(r) => format!(r#" clip-path="url(#clip{})""#, clip_id(&mut s, r)),
                    None => String::new(),
                };
                let mut d = String::new();
                for (k, p) in points.iter().enumerate() {
                    let _ = write!(
                        d,
                        "{}{} {}",
                        if k == 0 { "M" } else { " L" },
                        f(p.0),
                        f(p.1)
                    );
                }
                if *closed {
                    d.push_str(" Z");
                }
                let fill_attr = fill.map(hex).unwrap_or_else(|| "none".into());
                let _ = writeln!(
                    s,
                    r#"<path d="{d}" fill="{fill_attr}"{}{clip_attr}/>"#,
                    stroke_attrs(stroke.as_ref())
                );
            }
            Item::Text {
                block,
                x,
                y,
                vertical,
                color,
            } => text_element(&mut s, block, *x, *y, *vertical, *color),
        }
    }
    s.push_str("</svg>\n");
    Ok(s)
}

fn stroke_attrs(st: Option<&Stroke>) -> String {
    let Some(st) = st else {
        return String::new();
    };
    let mut a = format!(
        r#" stroke="{}" stroke-width="{}" stroke-linejoin="round" stroke-linecap="butt""#,
        hex(st.color),
        f(st.width)
    );
    if !st.dash.is_empty() {
        let d: Vec<String> = st.dash.iter().map(|v| f(*v)).collect();
        let _ = write!(a, r#" stroke-dasharray="{}""#, d.join(" "));
    }
    a
}

fn text_element(s: &mut String, b: &TextBlock, x: f64, y: f64, vertical: bool, color: [u8; 3]) {
    let transform = if vertical {
        format!(r#" transform="rotate(-90 {} {})""#, f(x), f(y))
    } else {
        String::new()
    };
    let _ = write!(
        s,
        r#"<text font-family="{FONT_FAMILY}" fill="{}" style="font-kerning:none" xml:space="preserve"{transform}>"#,
        hex(color)
    );
    for span in &b.spans {
        let _ = write!(
            s,
            r#"<tspan x="{}" y="{}" font-size="{}">{}</tspan>"#,
            f(x + span.dx),
            f(y + span.dy),
            f(span.size),
            xml_escape(&span.text)
        );
    }
    s.push_str("</text>\n");
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn base64_matches_rfc4648_test_vectors() {
        // RFC 4648 §10 test vectors.
        for (i, o) in [
            ("", ""),
            ("f", "Zg=="),
            ("fo", "Zm8="),
            ("foo", "Zm9v"),
            ("foob", "Zm9vYg=="),
            ("fooba", "Zm9vYmE="),
            ("foobar", "Zm9vYmFy"),
        ] {
            assert_eq!(base64(i.as_bytes()), o);
        }
    }

    #[test]
    fn escaping() {
        assert_eq!(xml_escape("a<b & \"c\""), "a&lt;b &amp; &quot;c&quot;");
        assert_eq!(f(1.5000), "1.5");
        assert_eq!(f(-0.0001), "0");
        assert_eq!(f(12.0), "12");
    }
}

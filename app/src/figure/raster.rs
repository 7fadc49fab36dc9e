//! Raster backend: draws the display list into a tiny-skia pixmap at the figure's DPI
//! (anti-aliased vectors, heat map resampled at device resolution on the exact pixel grid of the
//! plot rectangle) and encodes PNG with pHYs resolution metadata.

use super::draw::{DisplayList, Item, Stroke};
use super::geom::Rect;
use super::heatmap::{self, ColorMapping};
use super::layout::layout;
use super::scene::{Figure, HeatMap, Panel};
use super::stroke::{draw_stroke, DeviceRect, StrokeStyle};
use super::text::{glyph, TextBlock};
use crate::rows::par_rows_vec;
use fanmark_core::{Error, Result};
use rayon::prelude::*;
use std::rc::Rc;
use tiny_skia::{FillRule, Mask, Paint, PathBuilder, Pixmap, Transform};

/// Pixel rectangle (x0, y0, x1, y1), half-open, that a page rectangle in pt covers at `scale`
/// px/pt: edges rounded to whole pixels so a heat map fills it exactly.
pub fn pixel_rect(r: &Rect, scale: f64) -> (i64, i64, i64, i64) {
    (
        (r.x0 * scale).round() as i64,
        (r.y0 * scale).round() as i64,
        (r.x1 * scale).round() as i64,
        (r.y1 * scale).round() as i64,
    )
}

/// The heat-map layer of one panel at device resolution: straight-alpha RGBA of
/// `width`×`height` pixels covering the panel's axis ranges exactly. The viewer can cache it and
/// redraw only the overlay.
#[allow(dead_code)] // Entry point for the figure command and the viewer.
pub fn heatmap_layer(
    hm: &HeatMap,
    mapping: &ColorMapping,
    x_range: (f64, f64),
    y_range: (f64, f64),
    width: u32,
    height: u32,
) -> Vec<u8> {
    heatmap::render_rgba(hm, mapping, x_range, (y_range.1, y_range.0), width, height)
}

/// Render the figure to a pixmap at its DPI (white background). This is the call a viewer makes
/// each frame.
#[allow(dead_code)] // Entry point for the figure command and the viewer.
pub fn render_rgba(fig: &Figure) -> Result<Pixmap> {
    let list = layout(fig)?;
    draw_list(fig, &list)
}

/// Draw an already laid-out figure.
pub fn draw_list(fig: &Figure, list: &DisplayList) -> Result<Pixmap> {
    draw_list_with(fig, list, &mut |p, m, w, h| {
        let hm = p
            .heatmap
            .as_ref()
            .expect("called for panels with a heat map");
        Rc::new(heatmap_layer(hm, m, p.x_axis.range, p.y_axis.range, w, h))
    })
}

/// A source of heat-map layers: (panel, mapping, width, height) → straight-alpha RGBA, as
/// [`heatmap_layer`] makes them, shared so that a cache hands its layer out without a copy.
/// The viewer passes a cache here.
pub type LayerSource<'a> = dyn FnMut(&Panel, &ColorMapping, u32, u32) -> Rc<Vec<u8>> + 'a;

/// Draw an already laid-out figure, taking each heat-map layer from `layer`.
pub fn draw_list_with(fig: &Figure, list: &DisplayList, layer: &mut LayerSource) -> Result<Pixmap> {
    draw_list_banded(fig, list, layer, BAND_ROWS, DIRECT_ITEMS)
}

/// [`draw_list_with`] with vector items drawn in bands of `band_rows` rows, runs of at most
/// `direct` items in one pass.
pub(crate) fn draw_list_banded(
    fig: &Figure,
    list: &DisplayList,
    layer: &mut LayerSource,
    band_rows: usize,
    direct: usize,
) -> Result<Pixmap> {
    let (w, h) = fig.pixel_size();
    let mut pm = Pixmap::new(w, h).ok_or_else(|| {
        Error::invalid("figure", format!("cannot allocate a {w}×{h} pixel image"))
    })?;
    draw_list_onto_banded(&mut pm, fig, list, layer, band_rows, direct);
    Ok(pm)
}

/// Draw an already laid-out figure onto `pm` with the page's top-left corner at pixel (0, 0):
/// the page's pixels inside `pm` are filled white first, the rest of `pm` is left as it was;
/// what lies outside `pm` is cut off. The same pixels as [`draw_list_with`] where both draw.
pub fn draw_list_onto(pm: &mut Pixmap, fig: &Figure, list: &DisplayList, layer: &mut LayerSource) {
    draw_list_onto_banded(pm, fig, list, layer, BAND_ROWS, DIRECT_ITEMS);
}

/// [`draw_list_onto`] with vector items drawn in bands of `band_rows` rows, runs of at most
/// `direct` items in one pass.
fn draw_list_onto_banded(
    pm: &mut Pixmap,
    fig: &Figure,
    list: &DisplayList,
    layer: &mut LayerSource,
    band_rows: usize,
    direct: usize,
) {
    let (w, h) = fig.pixel_size();
    fill_white(pm, w, h);
    let scale = w as f64 / list.width;
    // Vector items since the last heat map or colour strip, drawn together in bands.
    let mut run: Vec<&Item> = Vec::new();
    for item in &list.items {
        if !matches!(item, Item::HeatMap { .. } | Item::ColorStrip { .. }) {
            run.push(item);
            continue;
        }
        draw_in_bands(pm, &run, scale, band_rows, direct);
        run.clear();
        match item {
            Item::HeatMap { panel, rect } => {
                let p = &fig.panels[*panel];
                let (Some(_), Some(m)) = (&p.heatmap, list.mappings[*panel]) else {
                    continue;
                };
                let (x0, y0, x1, y1) = pixel_rect(rect, scale);
                let (pw, ph) = ((x1 - x0).max(0) as u32, (y1 - y0).max(0) as u32);
                let img = layer(p, &m, pw, ph);
                if img.len() != (pw * ph * 4) as usize {
                    continue;
                }
                blit_opaque(pm, &img, x0, y0, pw, ph);
            }
            Item::ColorStrip { panel, rect } => {
                let Some(hm) = &fig.panels[*panel].heatmap else {
                    continue;
                };
                let (x0, y0, x1, y1) = pixel_rect(rect, scale);
                let (pw, ph) = ((x1 - x0).max(0) as u32, (y1 - y0).max(0) as u32);
                let img = strip_rgba(&hm.colors, pw, ph);
                blit_opaque(pm, &img, x0, y0, pw, ph);
            }
            _ => {}
        }
    }
    draw_in_bands(pm, &run, scale, band_rows, direct);
}

/// Fill the top-left `w`×`h` pixels of `pm` (as far as it reaches) opaque white, rows in
/// parallel.
fn fill_white(pm: &mut Pixmap, w: u32, h: u32) {
    let stride = pm.width() as usize * 4;
    let n = w.min(pm.width()) as usize * 4;
    let rows = (h as usize).min(pm.height() as usize);
    pm.data_mut()[..rows * stride]
        .par_chunks_mut(stride)
        .for_each(|row| row[..n].fill(255));
}

/// A `w`×`h` pixmap with every pixel `rgba` (premultiplied), written in parallel with no
/// zeroing pass first; `None` for an empty or oversized size.
pub fn filled_pixmap(w: u32, h: u32, rgba: [u8; 4]) -> Option<Pixmap> {
    let size = tiny_skia::IntSize::from_wh(w, h)?;
    let px = par_rows_vec(h as usize, w as usize, rgba, |_, _| {});
    Pixmap::from_vec(px.into_flattened(), size)
}

/// A copy of `pm`, its rows copied in parallel.
pub fn copy_pixmap(pm: &Pixmap) -> Pixmap {
    let (w, h) = (pm.width() as usize, pm.height() as usize);
    let data = pm.data();
    let px = par_rows_vec(h, w * 4, 0u8, |r, out| {
        out.extend(data[r * w * 4..(r + 1) * w * 4].iter().copied());
    });
    tiny_skia::IntSize::from_wh(pm.width(), pm.height())
        .and_then(|size| Pixmap::from_vec(px, size))
        .unwrap_or_else(|| pm.clone())
}

/// Rows of the page in each band when vector items are drawn in parallel. Fixed, so the
/// picture does not depend on the number of threads.
const BAND_ROWS: usize = 256;

/// Runs of at most this many vector items are drawn in one pass: copying every band of the page
/// out and back costs more than drawing them (1.2 ms a run on a 1600 × 1000 window).
const DIRECT_ITEMS: usize = 64;

/// Draw `items` (page pt at `scale` px/pt) onto `pm` in horizontal bands of `band_rows` rows,
/// in parallel: each band copied out, every item drawn into it, copied back; a run of at most
/// `direct` items in one pass.
fn draw_in_bands(pm: &mut Pixmap, items: &[&Item], scale: f64, band_rows: usize, direct: usize) {
    if items.is_empty() {
        return;
    }
    if items.len() <= direct {
        // A few items (axes, ticks, text): drawn straight onto the page, the same bytes as the
        // bands give, without copying every row of the page out and back.
        let mut masks = Vec::new();
        for item in items {
            draw_item(pm, item, scale, (0.0, 0.0), &mut masks);
        }
        return;
    }
    let w = pm.width();
    let stride = w as usize * 4;
    pm.data_mut()
        .par_chunks_mut(stride * band_rows.max(1))
        .enumerate()
        .for_each(|(k, rows)| {
            let Some(mut band) = Pixmap::new(w, (rows.len() / stride) as u32) else {
                return;
            };
            band.data_mut().copy_from_slice(rows);
            let origin = (0.0, (k * band_rows.max(1)) as f64);
            let mut masks = Vec::new();
            for item in items {
                draw_item(&mut band, item, scale, origin, &mut masks);
            }
            rows.copy_from_slice(band.data());
        });
}

/// Draw one path or text item into `pm` whose pixel (0, 0) is the page's device pixel `origin`
/// (so a pixmap can hold one region of the page). Clipped strokes without fill are drawn
/// analytically ([`draw_analytic_stroke`]); other clip rectangles become masks, kept in `masks`
/// for the next item with the same clip. Heat maps and colour strips are the caller's job.
pub fn draw_item(
    pm: &mut Pixmap,
    item: &Item,
    scale: f64,
    origin: (f64, f64),
    masks: &mut Vec<(Rect, Mask)>,
) {
    let all = (i64::MIN, i64::MIN, i64::MAX, i64::MAX);
    if matches!(item, Item::Path { clip: Some(_), .. })
        && draw_analytic_stroke(pm, item, scale, origin, all)
    {
        return;
    }
    match item {
        Item::Path {
            points,
            closed,
            fill,
            stroke,
            clip,
        } => {
            let mask = clip.map(|c| {
                if let Some(i) = masks.iter().position(|(r, _)| *r == c) {
                    i
                } else {
                    masks.push((c, clip_mask(&c, scale, origin, pm.width(), pm.height())));
                    masks.len() - 1
                }
            });
            let mask = mask.map(|i| &masks[i].1);
            draw_path(
                pm,
                points,
                *closed,
                *fill,
                stroke.as_ref(),
                (scale, origin),
                mask,
            );
        }
        Item::Text {
            block,
            x,
            y,
            vertical,
            color,
        } => draw_text(
            pm,
            block,
            *x * scale - origin.0,
            *y * scale - origin.1,
            scale,
            *vertical,
            *color,
        ),
        Item::HeatMap { .. } | Item::ColorStrip { .. } => {}
    }
}

/// Draw `item` with the analytic stroker if it is a stroked, unfilled path of positive width:
/// points at `scale` px/pt, `pm`'s pixel (0, 0) at device pixel `origin` (rounded to whole
/// pixels), only device pixels inside `clip` and the item's own clip rectangle touched.
/// `false` (nothing drawn) for anything else.
pub fn draw_analytic_stroke(
    pm: &mut Pixmap,
    item: &Item,
    scale: f64,
    origin: (f64, f64),
    clip: DeviceRect,
) -> bool {
    let Item::Path {
        points,
        closed,
        fill: None,
        stroke: Some(st),
        clip: own,
    } = item
    else {
        return false;
    };
    let width = st.width * scale;
    if !(width > 0.0) || !width.is_finite() {
        return false;
    }
    let clip = match own {
        Some(c) => {
            let (x0, y0, x1, y1) = pixel_rect(c, scale);
            (
                clip.0.max(x0),
                clip.1.max(y0),
                clip.2.min(x1),
                clip.3.min(y1),
            )
        }
        None => clip,
    };
    let dev: Vec<(f64, f64)> = points.iter().map(|p| (p.0 * scale, p.1 * scale)).collect();
    let dash: Vec<f64> = st.dash.iter().map(|d| d * scale).collect();
    let style = StrokeStyle {
        color: st.color,
        width,
        dash: &dash,
        closed: *closed,
    };
    let origin = (origin.0.round() as i64, origin.1.round() as i64);
    draw_stroke(pm, origin, &dev, &style, clip);
    true
}

/// A `w`×`h` mask, for a pixmap whose pixel (0, 0) is device pixel `origin`, that is opaque
/// over the whole device pixels page rectangle `c` covers at `scale` px/pt.
pub fn clip_mask(c: &Rect, scale: f64, origin: (f64, f64), w: u32, h: u32) -> Mask {
    let mut m = Mask::new(w, h).expect("mask of the pixmap's own positive size");
    let (x0, y0, x1, y1) = pixel_rect(c, scale);
    let (x0, y0) = (x0 as f64 - origin.0, y0 as f64 - origin.1);
    let (x1, y1) = (x1 as f64 - origin.0, y1 as f64 - origin.1);
    if let Some(r) = tiny_skia::Rect::from_ltrb(x0 as f32, y0 as f32, x1 as f32, y1 as f32) {
        let path = PathBuilder::from_rect(r);
        m.fill_path(&path, FillRule::Winding, false, Transform::identity());
    }
    m
}

/// The colour table as a vertical strip, low end at the bottom.
pub fn strip_rgba(colors: &[[u8; 3]], width: u32, height: u32) -> Vec<u8> {
    let mut out = Vec::with_capacity((width * height * 4) as usize);
    for r in 0..height {
        let t = 1.0 - (r as f64 + 0.5) / height as f64;
        let c = colors[((t * (colors.len() - 1) as f64).round() as usize).min(colors.len() - 1)];
        for _ in 0..width {
            out.extend_from_slice(&[c[0], c[1], c[2], 255]);
        }
    }
    out
}

/// The rows `y0..y1` of `pm` (premultiplied RGBA, 4 bytes a pixel), in parallel, each with its
/// row index; the caller has clipped `y0..y1` to the pixmap.
pub fn par_rows(
    pm: &mut Pixmap,
    y0: usize,
    y1: usize,
) -> impl IndexedParallelIterator<Item = (usize, &mut [u8])> {
    let stride = pm.width() as usize * 4;
    pm.data_mut()[y0 * stride..y1 * stride]
        .par_chunks_mut(stride)
        .enumerate()
        .map(move |(i, row)| (y0 + i, row))
}

/// Copy straight-alpha RGBA whose alpha is 0 or 255 into the pixmap at (x0, y0): the opaque
/// pixels, rows in parallel (a wholly opaque row in one copy).
fn blit_opaque(pm: &mut Pixmap, img: &[u8], x0: i64, y0: i64, w: u32, h: u32) {
    let (pw, ph) = (pm.width() as i64, pm.height() as i64);
    let (cx0, cx1) = (x0.max(0), (x0 + w as i64).min(pw));
    let (cy0, cy1) = (y0.max(0), (y0 + h as i64).min(ph));
    if cx0 >= cx1 || cy0 >= cy1 {
        return;
    }
    let row_bytes = w as usize * 4;
    par_rows(pm, cy0 as usize, cy1 as usize).for_each(|(y, out)| {
        let r = (y as i64 - y0) as usize;
        let src = &img[r * row_bytes..(r + 1) * row_bytes];
        let src = &src[(cx0 - x0) as usize * 4..(cx1 - x0) as usize * 4];
        let out = &mut out[cx0 as usize * 4..cx1 as usize * 4];
        if src.chunks_exact(4).all(|p| p[3] == 255) {
            out.copy_from_slice(src);
            return;
        }
        for (d, s) in out.chunks_exact_mut(4).zip(src.chunks_exact(4)) {
            if s[3] != 0 {
                d.copy_from_slice(s);
            }
        }
    });
}

/// Fill and/or stroke a polyline given in pt; `at` is (px per pt, device pixel at the pixmap's
/// (0, 0)).
fn draw_path(
    pm: &mut Pixmap,
    points: &[(f64, f64)],
    closed: bool,
    fill: Option<[u8; 3]>,
    stroke: Option<&Stroke>,
    at: (f64, (f64, f64)),
    mask: Option<&Mask>,
) {
    if points.len() < 2 {
        return;
    }
    let (scale, (ox, oy)) = at;
    let dev = |p: &(f64, f64)| ((p.0 * scale - ox) as f32, (p.1 * scale - oy) as f32);
    let mut pb = PathBuilder::new();
    let (x, y) = dev(&points[0]);
    pb.move_to(x, y);
    for p in &points[1..] {
        let (x, y) = dev(p);
        pb.line_to(x, y);
    }
    if closed {
        pb.close();
    }
    let Some(path) = pb.finish() else { return };
    let mut paint = Paint {
        anti_alias: true,
        ..Paint::default()
    };
    if let Some(c) = fill {
        paint.set_color_rgba8(c[0], c[1], c[2], 255);
        pm.fill_path(
            &path,
            &paint,
            FillRule::Winding,
            Transform::identity(),
            mask,
        );
    }
    if let Some(s) = stroke {
        paint.set_color_rgba8(s.color[0], s.color[1], s.color[2], 255);
        let mut st = tiny_skia::Stroke {
            width: (s.width * scale) as f32,
            line_join: tiny_skia::LineJoin::Round,
            line_cap: tiny_skia::LineCap::Butt,
            ..tiny_skia::Stroke::default()
        };
        if !s.dash.is_empty() {
            let d: Vec<f32> = s.dash.iter().map(|v| (v * scale) as f32).collect();
            st.dash = tiny_skia::StrokeDash::new(d, 0.0);
        }
        pm.stroke_path(&path, &paint, &st, Transform::identity(), mask);
    }
}

/// Draw text with its baseline starting at (x, y) px; `vertical` reads upwards.
fn draw_text(
    pm: &mut Pixmap,
    block: &TextBlock,
    x: f64,
    y: f64,
    scale: f64,
    vertical: bool,
    color: [u8; 3],
) {
    let (pw, ph) = (pm.width() as i64, pm.height() as i64);
    let data = pm.data_mut();
    for span in &block.spans {
        let px = (span.size * scale) as f32;
        let mut pen = span.dx * scale;
        let base = span.dy * scale;
        for c in span.text.chars() {
            let g = glyph(c, px);
            let (m, cov) = (&g.0, &g.1);
            // Glyph box in the text frame (u along the baseline, v downwards).
            let u0 = pen.round() as i64 + m.xmin as i64;
            let v0 = base.round() as i64 - m.ymin as i64 - m.height as i64;
            let (ox, oy) = (x.round() as i64, y.round() as i64);
            // The glyph's box in the pixmap: skip glyphs wholly outside (another band's).
            let (gw, gh) = (m.width as i64, m.height as i64);
            let (bx0, by0, bx1, by1) = if vertical {
                (ox + v0, oy - u0 - gw + 1, ox + v0 + gh, oy - u0 + 1)
            } else {
                (ox + u0, oy + v0, ox + u0 + gw, oy + v0 + gh)
            };
            if bx1 <= 0 || by1 <= 0 || bx0 >= pw || by0 >= ph {
                pen += m.advance_width as f64;
                continue;
            }
            for gy in 0..m.height {
                for gx in 0..m.width {
                    let a = cov[gy * m.width + gx] as u32;
                    if a == 0 {
                        continue;
                    }
                    let (u, v) = (u0 + gx as i64, v0 + gy as i64);
                    let (dx, dy) = if vertical {
                        (ox + v, oy - u)
                    } else {
                        (ox + u, oy + v)
                    };
                    if dx < 0 || dy < 0 || dx >= pw || dy >= ph {
                        continue;
                    }
                    let d = ((dy * pw + dx) * 4) as usize;
                    for k in 0..3 {
                        let src = color[k] as u32 * a;
                        data[d + k] = ((src + data[d + k] as u32 * (255 - a)) / 255) as u8;
                    }
                    data[d + 3] = ((255 * a + data[d + 3] as u32 * (255 - a)) / 255) as u8;
                }
            }
            pen += m.advance_width as f64;
        }
    }
}

/// Encode a pixmap as PNG (8-bit RGBA) with a pHYs chunk giving `dpi`.
pub fn encode_png(pm: &Pixmap, dpi: f64) -> Result<Vec<u8>> {
    use image::codecs::png::{CompressionType, FilterType, PngEncoder};
    use image::ImageEncoder;
    // A figure is opaque almost always: then it is stored as RGB, a quarter fewer bytes.
    let opaque = pm.pixels().iter().all(|p| p.alpha() == 255);
    let (bytes, color) = if opaque {
        let mut rgb = Vec::with_capacity(pm.pixels().len() * 3);
        for p in pm.pixels() {
            rgb.extend_from_slice(&[p.red(), p.green(), p.blue()]);
        }
        (rgb, image::ExtendedColorType::Rgb8)
    } else {
        let mut rgba = Vec::with_capacity(pm.data().len());
        for p in pm.pixels() {
            let c = p.demultiply();
            rgba.extend_from_slice(&[c.red(), c.green(), c.blue(), c.alpha()]);
        }
        (rgba, image::ExtendedColorType::Rgba8)
    };
    let mut png = Vec::new();
    PngEncoder::new_with_quality(&mut png, CompressionType::Fast, FilterType::Adaptive)
        .write_image(&bytes, pm.width(), pm.height(), color)
        .map_err(|e| Error::invalid("PNG encoding", e.to_string()))?;
    Ok(insert_phys(&png, dpi))
}

/// Insert a pHYs chunk (pixels per metre, unit = metre) right after IHDR.
fn insert_phys(png: &[u8], dpi: f64) -> Vec<u8> {
    let ppm = (dpi / 0.0254).round() as u32;
    let mut data = Vec::with_capacity(9);
    data.extend_from_slice(&ppm.to_be_bytes());
    data.extend_from_slice(&ppm.to_be_bytes());
    data.push(1);
    let mut chunk = Vec::with_capacity(21);
    chunk.extend_from_slice(&9u32.to_be_bytes());
    let mut typed = b"pHYs".to_vec();
    typed.extend_from_slice(&data);
    chunk.extend_from_slice(&typed);
    chunk.extend_from_slice(&crc32(&typed).to_be_bytes());
    // Signature (8) + IHDR chunk (4 length + 4 type + 13 data + 4 CRC).
    let at = 8 + 25;
    let mut out = Vec::with_capacity(png.len() + chunk.len());
    out.extend_from_slice(&png[..at]);
    out.extend_from_slice(&chunk);
    out.extend_from_slice(&png[at..]);
    out
}

/// CRC-32 as PNG defines it (polynomial 0xEDB88320, reflected).
fn crc32(bytes: &[u8]) -> u32 {
    let mut c = 0xFFFF_FFFFu32;
    for &b in bytes {
        c ^= b as u32;
        for _ in 0..8 {
            c = if c & 1 != 0 {
                0xEDB8_8320 ^ (c >> 1)
            } else {
                c >> 1
            };
        }
    }
    c ^ 0xFFFF_FFFF
}

/// Render the figure and return PNG bytes with the figure's DPI recorded.
pub fn png_bytes(fig: &Figure) -> Result<Vec<u8>> {
    encode_png(&render_rgba(fig)?, fig.dpi)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn crc_matches_the_png_specification_check_value() {
        // CRC-32 of "123456789" is 0xCBF43926 (the standard check value for this CRC).
        assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
        // The IEND chunk's CRC over its type is the well-known AE 42 60 82.
        assert_eq!(crc32(b"IEND"), 0xAE42_6082);
    }

    #[test]
    fn blitting_copies_the_opaque_pixels_that_land_inside() {
        // A 3 × 2 image with one transparent pixel, put half outside a 4 × 3 pixmap.
        let img: Vec<u8> = (0..6u8)
            .flat_map(|k| [10 * k, 1, 2, if k == 4 { 0 } else { 255 }])
            .collect();
        let mut pm = Pixmap::new(4, 3).unwrap();
        pm.fill(tiny_skia::Color::from_rgba8(7, 7, 7, 255));
        blit_opaque(&mut pm, &img, 2, 1, 3, 2);
        for y in 0..3i64 {
            for x in 0..4i64 {
                let p = pm.pixel(x as u32, y as u32).unwrap();
                let (c, r) = (x - 2, y - 1);
                let k = r * 3 + c;
                let inside = (0..3).contains(&c) && (0..2).contains(&r) && k != 4;
                let want = if inside { (10 * k) as u8 } else { 7 };
                assert_eq!(p.red(), want, "({x}, {y})");
            }
        }
    }

    #[test]
    fn strip_runs_from_high_at_top_to_low_at_bottom() {
        let colors: Vec<[u8; 3]> = (0..256).map(|i| [i as u8, 0, 255 - i as u8]).collect();
        let s = strip_rgba(&colors, 2, 256);
        assert_eq!(&s[0..4], &[255, 0, 0, 255]);
        let last = s.len() - 4;
        assert_eq!(&s[last..], &[0, 0, 255, 255]);
    }
}

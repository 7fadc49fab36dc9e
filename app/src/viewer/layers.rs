//! Cached pixel layers of the viewer and their compositing: an overlay layer (the lines, markers
//! and labels over the plot) drawn once in parallel horizontal bands, kept as premultiplied RGBA
//! (strokes no wider than a pixel as hairlines, wider ones with the analytic stroker), and laid
//! over the opaque base (heat map and axes) with a straight loop over pixels — shifted by a whole
//! number of pixels while a drag is in progress.

use crate::figure::draw::Item;
use crate::figure::hairline::draw_hairline;
use crate::figure::raster::{draw_analytic_stroke, draw_item, par_rows};
use rayon::prelude::*;
use tiny_skia::Pixmap;

/// A half-open rectangle of device pixels (x0, y0, x1, y1) of the window.
pub type PixelRect = (i64, i64, i64, i64);

/// An overlay drawn over the plot: premultiplied RGBA covering exactly the plot's pixel
/// rectangle, stored as horizontal bands (one per worker) stacked top to bottom. Either
/// transparent where nothing is drawn (laid over a picture by source-over), or opaque: drawn
/// straight over a copy of the picture it will be shown on, so that showing it is a copy.
pub struct OverlayLayer {
    /// The window pixels the layer covers.
    pub rect: PixelRect,
    /// (first window row, pixels) of each band, top to bottom, together covering `rect`.
    bands: Vec<(i64, Pixmap)>,
    /// Whether the bands hold the picture under the items too (see [`Self::draw_over`]).
    opaque: bool,
}

impl OverlayLayer {
    /// Draw `items` (page pt at `scale` px/pt) into a transparent layer over `rect`, split into
    /// `bands` horizontal bands drawn in parallel. The layer's edges clip the items exactly as a
    /// clip mask on `rect` would. `None` for an empty rectangle.
    pub fn draw(items: &[Item], scale: f64, rect: PixelRect, bands: usize) -> Option<OverlayLayer> {
        Self::draw_on(items, scale, rect, bands, None)
    }

    /// [`Self::draw`] with each band starting as the pixels of `under` (a window-sized opaque
    /// picture) in `rect` instead of transparent: the items drawn straight over that picture,
    /// as one pass onto it would draw them, and [`Self::composite`] then copies the pixels.
    /// Transparent when `rect` does not lie inside `under`.
    pub fn draw_over(
        items: &[Item],
        scale: f64,
        rect: PixelRect,
        bands: usize,
        under: &Pixmap,
    ) -> Option<OverlayLayer> {
        let inside = rect.0 >= 0
            && rect.1 >= 0
            && rect.2 <= under.width() as i64
            && rect.3 <= under.height() as i64;
        Self::draw_on(items, scale, rect, bands, inside.then_some(under))
    }

    fn draw_on(
        items: &[Item],
        scale: f64,
        rect: PixelRect,
        bands: usize,
        under: Option<&Pixmap>,
    ) -> Option<OverlayLayer> {
        let (x0, y0, x1, y1) = rect;
        let (w, h) = (x1 - x0, y1 - y0);
        if w <= 0 || h <= 0 {
            return None;
        }
        let n = (bands.max(1) as i64).min(h);
        let edges: Vec<i64> = (0..=n).map(|k| y0 + h * k / n).collect();
        // The band of window rows [top, bottom): transparent, or the rows of `under`.
        let start = |top: i64, bottom: i64| -> Option<Pixmap> {
            let Some(pic) = under else {
                return Pixmap::new(w as u32, (bottom - top) as u32);
            };
            let stride = pic.width() as usize * 4;
            let (c0, c1) = (x0 as usize * 4, x1 as usize * 4);
            let mut data = Vec::with_capacity((c1 - c0) * (bottom - top) as usize);
            for row in pic
                .data()
                .chunks_exact(stride)
                .take(bottom as usize)
                .skip(top as usize)
            {
                data.extend_from_slice(&row[c0..c1]);
            }
            Pixmap::from_vec(
                data,
                tiny_skia::IntSize::from_wh(w as u32, (bottom - top) as u32)?,
            )
        };
        // Each hairline's device points found once for all bands, with the rows it spans.
        let prepared: Vec<Prepared> = items
            .iter()
            .map(|it| PreparedHairline::of(it, scale))
            .collect();
        let bands: Option<Vec<(i64, Pixmap)>> = edges
            .par_windows(2)
            .map(|e| {
                let mut pm = start(e[0], e[1])?;
                let origin = (x0 as f64, e[0] as f64);
                let mut masks = Vec::new();
                let all = (0, 0, i64::MAX, i64::MAX);
                let mut points = Vec::new();
                for (item, prep) in items.iter().zip(&prepared) {
                    let Some(h) = prep else {
                        draw_overlay_item(&mut pm, item, scale, origin, all, &mut masks);
                        continue;
                    };
                    // A hairline touches no pixel more than a row beyond the rows it spans.
                    if h.rows.1 + 2.0 < e[0] as f64 || h.rows.0 - 2.0 > e[1] as f64 {
                        continue;
                    }
                    points.clear();
                    points.extend(h.device.iter().map(|p| (p.0 - origin.0, p.1 - origin.1)));
                    draw_hairline(&mut pm, &points, h.color, h.coverage, &h.dash, all);
                }
                Some((e[0], pm))
            })
            .collect();
        Some(OverlayLayer {
            rect,
            bands: bands?,
            opaque: under.is_some(),
        })
    }

    /// Whether the layer holds the picture under its items (drawn by [`Self::draw_over`]).
    pub fn is_opaque(&self) -> bool {
        self.opaque
    }

    /// The layer's premultiplied pixel at window pixel (x, y), transparent outside.
    pub fn pixel(&self, x: i64, y: i64) -> [u8; 4] {
        let (x0, _, x1, _) = self.rect;
        if x < x0 || x >= x1 {
            return [0; 4];
        }
        for (top, pm) in &self.bands {
            if y >= *top && y < top + pm.height() as i64 {
                let i = (((y - top) * pm.width() as i64 + (x - x0)) * 4) as usize;
                let d = pm.data();
                return [d[i], d[i + 1], d[i + 2], d[i + 3]];
            }
        }
        [0; 4]
    }

    /// One row of the layer (premultiplied RGBA, the layer's width) at window row `y`.
    fn row(&self, y: i64) -> Option<&[u8]> {
        self.bands.iter().find_map(|(top, pm)| {
            let r = y - top;
            if r < 0 || r >= pm.height() as i64 {
                return None;
            }
            let stride = pm.width() as usize * 4;
            Some(&pm.data()[r as usize * stride..(r as usize + 1) * stride])
        })
    }

    /// Lay the layer over `dst` (premultiplied RGBA, a window-sized pixmap), moved by `shift`
    /// window pixels, keeping only the pixels that land inside `clip`: source-over,
    /// out = src + dst · (255 − src alpha) / 255 per channel, rows in parallel (an opaque
    /// layer's pixels are copied).
    pub fn composite(&self, dst: &mut Pixmap, shift: (i64, i64), clip: PixelRect) {
        let (dw, dh) = (dst.width() as i64, dst.height() as i64);
        let (lx0, ly0, lx1, ly1) = self.rect;
        // Window rectangle the moved layer covers, inside the clip and the window.
        let cx0 = (lx0 + shift.0).max(clip.0).max(0);
        let cx1 = (lx1 + shift.0).min(clip.2).min(dw);
        let cy0 = (ly0 + shift.1).max(clip.1).max(0);
        let cy1 = (ly1 + shift.1).min(clip.3).min(dh);
        if cx0 >= cx1 || cy0 >= cy1 {
            return;
        }
        par_rows(dst, cy0 as usize, cy1 as usize).for_each(|(y, out)| {
            let Some(src) = self.row(y as i64 - shift.1) else {
                return;
            };
            let sx0 = (cx0 - shift.0 - lx0) as usize;
            let n = (cx1 - cx0) as usize;
            let src = &src[sx0 * 4..(sx0 + n) * 4];
            let out = &mut out[cx0 as usize * 4..cx1 as usize * 4];
            if self.opaque {
                out.copy_from_slice(src);
            } else {
                over(out, src);
            }
        });
    }
}

/// Draw one overlay item into `pm` whose pixel (0, 0) is device pixel `origin` (whole pixels):
/// strokes no wider than a pixel as hairlines, wider unfilled strokes with the analytic stroker,
/// both kept inside `clip` (pixels of `pm`; unclipped otherwise), the rest through the raster
/// backend.
pub fn draw_overlay_item(
    pm: &mut Pixmap,
    item: &Item,
    scale: f64,
    origin: (f64, f64),
    clip: PixelRect,
    masks: &mut Vec<(crate::figure::geom::Rect, tiny_skia::Mask)>,
) {
    match hairline_of(item, scale) {
        Some((points, color, coverage, dash)) => {
            let dev: Vec<(f64, f64)> = points
                .iter()
                .map(|p| (p.0 * scale - origin.0, p.1 * scale - origin.1))
                .collect();
            draw_hairline(pm, &dev, color, coverage, &dash, clip);
        }
        None => {
            // The pixel clip in device pixels for the analytic stroker.
            let device = (
                clip.0.saturating_add(origin.0 as i64),
                clip.1.saturating_add(origin.1 as i64),
                clip.2.saturating_add(origin.0 as i64),
                clip.3.saturating_add(origin.1 as i64),
            );
            if !draw_analytic_stroke(pm, item, scale, origin, device) {
                draw_item(pm, item, scale, origin, masks);
            }
        }
    }
}

/// A hairline to draw: points (pt), colour, coverage, dash (device px).
type Hairline<'a> = (&'a [(f64, f64)], [u8; 3], f64, Vec<f64>);

/// An overlay item that is a hairline, made ready once for every band: its points in device
/// pixels of the window, the rows they span (lowest, highest y), colour, coverage and dash
/// (device px). `None` for the other items.
type Prepared = Option<PreparedHairline>;

/// See [`Prepared`].
struct PreparedHairline {
    device: Vec<(f64, f64)>,
    rows: (f64, f64),
    color: [u8; 3],
    coverage: f64,
    dash: Vec<f64>,
}

impl PreparedHairline {
    /// `item` made ready if it is a hairline at `scale` px/pt (as [`draw_overlay_item`] would
    /// draw it: the same device points, to the bit).
    fn of(item: &Item, scale: f64) -> Prepared {
        let (points, color, coverage, dash) = hairline_of(item, scale)?;
        let device: Vec<(f64, f64)> = points.iter().map(|p| (p.0 * scale, p.1 * scale)).collect();
        let rows = device
            .iter()
            .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), p| {
                (lo.min(p.1), hi.max(p.1))
            });
        // A point that is not a number leaves the span unknown: every band draws the line.
        let rows = if device.iter().all(|p| p.1.is_finite()) {
            rows
        } else {
            (f64::NEG_INFINITY, f64::INFINITY)
        };
        Some(PreparedHairline {
            device,
            rows,
            color,
            coverage,
            dash,
        })
    }
}

/// The open stroke no wider than one device pixel that `item` is, as (points in pt, colour,
/// coverage, dash in device px): drawn as a hairline (its clip rectangle, if any, is the
/// caller's pixel clip).
fn hairline_of(item: &Item, scale: f64) -> Option<Hairline<'_>> {
    match item {
        Item::Path {
            points,
            closed: false,
            fill: None,
            stroke: Some(st),
            ..
        } if st.width * scale <= 1.0 => {
            let w = st.width * scale;
            let coverage = if w > 0.0 { w } else { 1.0 };
            let dash = st.dash.iter().map(|d| d * scale).collect();
            Some((points, st.color, coverage, dash))
        }
        _ => None,
    }
}

/// Premultiplied source-over of `src` onto `dst`, both RGBA of the same length. Runs of
/// transparent source pixels (most of an overlay) are passed over eight bytes at a time.
fn over(dst: &mut [u8], src: &[u8]) {
    let mut d = dst.chunks_exact_mut(8);
    let mut s = src.chunks_exact(8);
    for (d2, s2) in (&mut d).zip(&mut s) {
        if let Ok(bytes) = <[u8; 8]>::try_from(s2) {
            if u64::from_ne_bytes(bytes) == 0 {
                continue;
            }
        }
        over_pixel(&mut d2[..4], &s2[..4]);
        over_pixel(&mut d2[4..], &s2[4..]);
    }
    if let (Some(d1), Some(s1)) = (d.into_remainder().get_mut(..4), s.remainder().get(..4)) {
        over_pixel(d1, s1);
    }
}

/// Premultiplied source-over of one pixel.
fn over_pixel(d: &mut [u8], s: &[u8]) {
    match s[3] {
        0 => {}
        255 => d.copy_from_slice(s),
        a => {
            let k = 255 - a as u32;
            for c in 0..4 {
                // Rounded x · k / 255 without a division.
                let t = d[c] as u32 * k + 128;
                d[c] = (s[c] as u32 + ((t + (t >> 8)) >> 8)).min(255) as u8;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn over_matches_the_source_over_formula() {
        // Source-over for premultiplied colour (Porter & Duff 1984): out = s + d·(1 − αs).
        let src = [100u8, 50, 0, 128];
        let dst = [200u8, 200, 200, 255];
        let mut out = dst;
        over(&mut out, &src);
        for c in 0..4 {
            let exact = src[c] as f64 + dst[c] as f64 * (255.0 - 128.0) / 255.0;
            assert!((out[c] as f64 - exact).abs() <= 0.5 + 1e-9, "{out:?}");
        }
        // Runs of pixels, an odd count: each pixel as alone, transparent ones untouched.
        let srcs = [
            [0u8, 0, 0, 0],
            src,
            [9, 9, 9, 255],
            [0, 0, 0, 0],
            [0, 0, 0, 0],
        ];
        let mut row: Vec<u8> = (0..5).flat_map(|_| dst).collect();
        over(&mut row, &srcs.concat());
        for (k, s) in srcs.iter().enumerate() {
            let mut one = dst;
            over(&mut one, s);
            assert_eq!(&row[4 * k..4 * k + 4], &one, "pixel {k}");
        }
        let mut clear = dst;
        over(&mut clear, &[0, 0, 0, 0]);
        assert_eq!(clear, dst);
        over(&mut clear, &[1, 2, 3, 255]);
        assert_eq!(clear, [1, 2, 3, 255]);
    }

    #[test]
    fn bands_together_equal_one_layer_and_shifting_moves_pixels() {
        use crate::figure::draw::Stroke;
        let items = vec![Item::Path {
            points: vec![(1.0, 1.0), (30.0, 45.0), (5.0, 40.0)],
            closed: false,
            fill: None,
            stroke: Some(Stroke {
                color: [255, 0, 0],
                width: 2.0,
                dash: vec![3.0, 1.0],
            }),
            clip: None,
        }];
        let rect = (10, 20, 60, 90);
        let one = OverlayLayer::draw(&items, 1.5, rect, 1).unwrap();
        let four = OverlayLayer::draw(&items, 1.5, rect, 4).unwrap();
        let mut drawn = 0;
        for y in 20..90 {
            for x in 10..60 {
                let (a, b) = (one.pixel(x, y), four.pixel(x, y));
                for c in 0..4 {
                    assert!(a[c].abs_diff(b[c]) <= 1, "({x}, {y}): {a:?} vs {b:?}");
                }
                drawn += (a[3] > 0) as usize;
            }
        }
        assert!(drawn > 50, "{drawn} pixels drawn");
        let mut base = Pixmap::new(80, 100).unwrap();
        base.fill(tiny_skia::Color::WHITE);
        let mut moved = base.clone();
        one.composite(&mut moved, (3, -2), (0, 0, 80, 100));
        let mut still = base.clone();
        one.composite(&mut still, (0, 0), (0, 0, 80, 100));
        let px = |p: &Pixmap, x: u32, y: u32| p.pixel(x, y).unwrap();
        for y in 22..88 {
            for x in 10..57 {
                assert_eq!(px(&still, x, y), px(&moved, x + 3, y - 2));
            }
        }
        // Drawn over the picture itself: the same as the transparent layer laid over it.
        let mut picture = Pixmap::new(80, 100).unwrap();
        for (k, px) in picture.data_mut().chunks_exact_mut(4).enumerate() {
            px.copy_from_slice(&[(k % 251) as u8, (k / 7 % 253) as u8, 90, 255]);
        }
        let opaque = OverlayLayer::draw_over(&items, 1.5, rect, 3, &picture).unwrap();
        let mut laid = picture.clone();
        one.composite(&mut laid, (0, 0), (0, 0, 80, 100));
        let mut copied = base.clone();
        opaque.composite(&mut copied, (0, 0), (0, 0, 80, 100));
        for y in 0..100 {
            for x in 0..80 {
                let want = if (10..60).contains(&x) && (20..90).contains(&y) {
                    px(&laid, x, y)
                } else {
                    px(&base, x, y)
                };
                let got = px(&copied, x, y);
                let d = [
                    got.red().abs_diff(want.red()),
                    got.green().abs_diff(want.green()),
                    got.blue().abs_diff(want.blue()),
                    got.alpha().abs_diff(want.alpha()),
                ];
                assert!(d.iter().all(|&d| d <= 1), "({x}, {y}): {got:?} vs {want:?}");
            }
        }
        // A layer reaching past the picture is drawn transparent.
        assert!(opaque.is_opaque());
        assert!(
            !OverlayLayer::draw_over(&items, 1.5, (10, 20, 90, 90), 2, &picture)
                .unwrap()
                .is_opaque()
        );
        // A clip keeps the layer inside it.
        let mut clipped = base.clone();
        one.composite(&mut clipped, (0, 0), (0, 0, 30, 100));
        for y in 0..100 {
            for x in 30..80 {
                assert_eq!(px(&clipped, x, y), px(&base, x, y));
            }
        }
    }
}

//! Anti-aliased strokes of any width: opaque polylines (solid or dashed along the arc length,
//! butt caps, round joins) drawn straight into a premultiplied pixmap. Each pixel's coverage is
//! computed analytically from its centre's distance to the stroke's centre line: the overlap of
//! the pixel's one-pixel-wide box with the stroke's cross-section, times the same overlap along
//! the segment at a butt end. Within one path the coverages of its segments are united as a
//! maximum (round joins without seams or double blending) and blended once. A pixel's result
//! depends only on its device position, never on which band of the page a pixmap holds.
//!
//! Work is per row of each segment's reach, so many long dashed lines cost little compared with
//! a general path stroker.

use std::cell::RefCell;
use tiny_skia::Pixmap;

/// A half-open rectangle of device pixels (x0, y0, x1, y1).
pub type DeviceRect = (i64, i64, i64, i64);

/// An opaque stroke in device pixels.
#[derive(Clone, Copy, Debug)]
pub struct StrokeStyle<'a> {
    /// sRGB colour, drawn opaque.
    pub color: [u8; 3],
    /// Full width across the line, device px.
    pub width: f64,
    /// Dash pattern, device px: on/off lengths along the arc from the first point. Solid unless
    /// it has an even, non-zero number of finite lengths ≥ 0 with a positive sum.
    pub dash: &'a [f64],
    /// Join the last point back to the first (a round join there instead of two caps).
    pub closed: bool,
}

/// Draw the polyline `points` (device px) with `style` into `pm`, whose pixel (0, 0) is device
/// pixel `origin`, touching only device pixels inside `clip`. Non-finite points break the line;
/// a non-positive or non-finite width draws nothing.
pub fn draw_stroke(
    pm: &mut Pixmap,
    origin: (i64, i64),
    points: &[(f64, f64)],
    style: &StrokeStyle,
    clip: DeviceRect,
) {
    let r = 0.5 * style.width;
    if !(r > 0.0) || !r.is_finite() || points.len() < 2 {
        return;
    }
    let (w, h) = (pm.width() as i64, pm.height() as i64);
    // The clip in the pixmap's own pixels.
    let area = (
        (clip.0.saturating_sub(origin.0)).max(0),
        (clip.1.saturating_sub(origin.1)).max(0),
        (clip.2.saturating_sub(origin.0)).min(w),
        (clip.3.saturating_sub(origin.1)).min(h),
    );
    if area.0 >= area.2 || area.1 >= area.3 {
        return;
    }
    let dash = valid_dash(style.dash);
    let pieces = pieces(points, style.closed, dash);
    SCRATCH.with(|s| {
        let mut s = s.borrow_mut();
        s.prepare(w as usize, h as usize);
        for p in &pieces {
            s.cover(p, r, origin, area);
        }
        s.blend(pm, style.color);
    });
}

/// The dash pattern if it is one tiny-skia would dash with, otherwise `None` (solid).
fn valid_dash(dash: &[f64]) -> Option<&[f64]> {
    let ok = !dash.is_empty()
        && dash.len() % 2 == 0
        && dash.iter().all(|d| d.is_finite() && *d >= 0.0)
        && dash.iter().sum::<f64>() > 0.0;
    ok.then_some(dash)
}

/// One straight stretch of a stroke: from (ax, ay) along the unit vector (ux, uy) for `len`
/// device px; each end is a butt cap or a round join with the next stretch.
#[derive(Clone, Copy, Debug)]
struct Piece {
    ax: f64,
    ay: f64,
    ux: f64,
    uy: f64,
    len: f64,
    butt_start: bool,
    butt_end: bool,
    /// At a round end joined to a neighbour that ends in a butt cap within reach: the
    /// neighbour's unit direction pointing away from the shared vertex and its length. The
    /// join's disc must not reach past that butt end.
    start_limit: Option<(f64, f64, f64)>,
    end_limit: Option<(f64, f64, f64)>,
}

impl Piece {
    fn end(&self) -> (f64, f64) {
        (self.ax + self.ux * self.len, self.ay + self.uy * self.len)
    }
}

/// The stretches of the polyline that are drawn: its segments cut by the dash pattern, butt caps
/// where a dash or the line starts or ends, round joins where a dash runs on past a vertex.
fn pieces(points: &[(f64, f64)], closed: bool, dash: Option<&[f64]>) -> Vec<Piece> {
    let n = points.len();
    let closing = closed.then(|| (points[n - 1], points[0]));
    let segments = points.windows(2).map(|s| (s[0], s[1])).chain(closing);
    let mut out: Vec<Piece> = Vec::new();
    // Dash state: index of the current entry, length left in it, drawing or not.
    let (mut k, mut left, mut on) = (0usize, dash.map_or(f64::INFINITY, |d| d[0]), true);
    // The last piece ended at a vertex with its dash still running.
    let mut joined = false;
    let finite = |p: (f64, f64)| p.0.is_finite() && p.1.is_finite();
    for (a, b) in segments {
        if !finite(a) || !finite(b) {
            joined = false;
            continue;
        }
        let len = (b.0 - a.0).hypot(b.1 - a.1);
        if !(len > 0.0) || !len.is_finite() {
            continue;
        }
        let (ux, uy) = ((b.0 - a.0) / len, (b.1 - a.1) / len);
        let mut s = 0.0;
        loop {
            if let Some(d) = dash {
                while left <= 0.0 {
                    k = (k + 1) % d.len();
                    left = d[k];
                    on = k % 2 == 0;
                    joined = false;
                }
            }
            let rest = len - s;
            let step = left.min(rest);
            if on {
                let from_vertex = s == 0.0 && joined;
                if from_vertex {
                    if let Some(last) = out.last_mut() {
                        last.butt_end = false;
                    }
                }
                out.push(Piece {
                    ax: a.0 + ux * s,
                    ay: a.1 + uy * s,
                    ux,
                    uy,
                    len: step,
                    butt_start: !from_vertex,
                    butt_end: true,
                    start_limit: None,
                    end_limit: None,
                });
            }
            left -= step;
            if left >= 0.0 && step >= rest {
                break;
            }
            s += step;
        }
        joined = on && left > 0.0;
    }
    // A closed solid line joins its end to its start.
    if closed && dash.is_none() && joined && out.len() > 1 {
        out[0].butt_start = false;
        if let Some(last) = out.last_mut() {
            last.butt_end = false;
        }
    }
    // Joined neighbours that end in a butt cap bound the disc of the join.
    for i in 1..out.len() {
        let (a, b) = (out[i - 1], out[i]);
        if !a.butt_end && !b.butt_start {
            if b.butt_end {
                out[i - 1].end_limit = Some((b.ux, b.uy, b.len));
            }
            if a.butt_start {
                out[i].start_limit = Some((-a.ux, -a.uy, a.len));
            }
        }
    }
    out
}

/// Overlap of the unit interval [c − ½, c + ½] with [lo, hi] (either end may be infinite).
#[inline]
fn overlap(c: f64, lo: f64, hi: f64) -> f64 {
    ((c + 0.5).min(hi) - (c - 0.5).max(lo)).clamp(0.0, 1.0)
}

/// Raise the coverage byte `out` to coverage `c` (0…1) where that is more; whether `c` covers
/// anything at all.
#[inline(always)]
fn raise(out: &mut u8, c: f64) -> bool {
    if c > 0.0 {
        let v = (c * 255.0 + 0.5) as u8;
        if v > *out {
            *out = v;
        }
        true
    } else {
        false
    }
}

/// Per-thread coverage buffer of a pixmap's size (zero between calls) and the touched columns of
/// each row.
struct Scratch {
    cov: Vec<u8>,
    /// (first, last + 1) touched column per row; empty when first ≥ last.
    rows: Vec<(usize, usize)>,
    width: usize,
    /// Rows touched by the current path, first and last + 1.
    span: (usize, usize),
}

thread_local! {
    static SCRATCH: RefCell<Scratch> = const {
        RefCell::new(Scratch { cov: Vec::new(), rows: Vec::new(), width: 0, span: (0, 0) })
    };
}

impl Scratch {
    /// Size the buffers for a `w`×`h` pixmap (all entries are zero between calls).
    fn prepare(&mut self, w: usize, h: usize) {
        if self.cov.len() < w * h {
            self.cov.resize(w * h, 0);
        }
        if self.rows.len() < h {
            self.rows.resize(h, (usize::MAX, 0));
        }
        self.width = w;
        self.span = (usize::MAX, 0);
    }

    /// Take the maximum of the buffer and `p`'s coverage (half-width `r`) over the pixels of
    /// `area` (pixmap pixels) that `p` can reach.
    fn cover(&mut self, p: &Piece, r: f64, origin: (i64, i64), area: DeviceRect) {
        // A pixel centre beyond r + ½ from the centre line, or ½ past a butt end, gets nothing:
        // every covered centre lies within `reach` (the corner of that box) of the segment.
        // Everything is computed in device pixels (the origin is only an integer offset) so
        // bands agree to the bit.
        let reach = 0.5f64.hypot(r + 0.5) * (1.0 + 1e-9);
        let (ax, ay) = (p.ax, p.ay);
        let (bx, by) = p.end();
        let (ylo, yhi) = (ay.min(by) - reach, ay.max(by) + reach);
        let (xlo, xhi) = (ax.min(bx) - reach, ax.max(bx) + reach);
        // The area in device pixels.
        let (fx0, fy0, fx1, fy1) = (
            (area.0 + origin.0) as f64,
            (area.1 + origin.1) as f64,
            (area.2 + origin.0) as f64,
            (area.3 + origin.1) as f64,
        );
        if yhi < fy0 || ylo > fy1 || xhi < fx0 || xlo > fx1 {
            return;
        }
        // Device rows whose centre y + ½ lies in [ylo, yhi].
        let row0 = (ylo - 0.5).ceil().max(fy0) as i64;
        let row1 = ((yhi - 0.5).floor() + 1.0).min(fy1) as i64;
        // Along and across bounds: a butt end cuts at 0 or len, a round end clamps there.
        let (t_lo, t_hi) = (
            if p.butt_start { f64::NEG_INFINITY } else { 0.0 },
            if p.butt_end { f64::INFINITY } else { p.len },
        );
        let (a_lo, a_hi) = (
            if p.butt_start { 0.0 } else { f64::NEG_INFINITY },
            if p.butt_end { p.len } else { f64::INFINITY },
        );
        let butt = p.butt_start || p.butt_end;
        let dy = by - ay;
        let flat = dy.abs() < 1e-12;
        let w = self.width;
        for gy in row0..row1 {
            let yc = gy as f64 + 0.5;
            // x extent of the segment's points within `reach` of this row, widened by `reach`.
            let (sx0, sx1) = if flat {
                (ax.min(bx), ax.max(bx))
            } else {
                let t0 = ((yc - reach - ay) / dy).clamp(0.0, 1.0);
                let t1 = ((yc + reach - ay) / dy).clamp(0.0, 1.0);
                let (x0, x1) = (ax + (bx - ax) * t0, ax + (bx - ax) * t1);
                (x0.min(x1), x0.max(x1))
            };
            let c0 = (sx0 - reach - 0.5).ceil().max(fx0);
            let c1 = ((sx1 + reach - 0.5).floor() + 1.0).min(fx1);
            if c0 >= c1 {
                continue;
            }
            // Pixmap columns and row.
            let (c0, c1) = (
                (c0 as i64 - origin.0) as usize,
                (c1 as i64 - origin.0) as usize,
            );
            let y = (gy - origin.1) as usize;
            let ry = yc - ay;
            // Device x of the next pixel centre: a whole number plus ½, stepped exactly.
            let mut xc = (c0 as i64 + origin.0) as f64 + 0.5;
            let line = &mut self.cov[y * w + c0..y * w + c1];
            let mut any = false;
            // Where every centre of the row lies along the piece between its ends (at least
            // ½ inside a butt end, not past a round one), a pixel's coverage is the overlap of
            // its box with the cross-section alone: t, linear along the row, is checked at the
            // row's two ends.
            let along = |x: f64| (x - ax) * p.ux + ry * p.uy;
            let (ta, tb) = (along(xc), along(xc + (c1 - c0 - 1) as f64));
            let lower = t_lo.max(if p.butt_start { 0.5 } else { f64::NEG_INFINITY });
            let upper = t_hi.min(if p.butt_end {
                p.len - 0.5
            } else {
                f64::INFINITY
            });
            if ta.min(tb) >= lower + 1e-6 && ta.max(tb) <= upper - 1e-6 {
                for out in line.iter_mut() {
                    let q = ((xc - ax) * p.uy - ry * p.ux).abs();
                    xc += 1.0;
                    any |= raise(out, overlap(q, -r, r));
                }
            } else {
                for out in line.iter_mut() {
                    let rx = xc - ax;
                    xc += 1.0;
                    let t = rx * p.ux + ry * p.uy;
                    let q = (rx * p.uy - ry * p.ux).abs();
                    let tc = t.clamp(t_lo, t_hi);
                    let mut c = if tc == t {
                        overlap(q, -r, r)
                    } else {
                        // Inside the disc of a round join: not past a short neighbour's butt end.
                        let (limit, (vx, vy)) = if t < 0.0 {
                            (p.start_limit, (0.0, 0.0))
                        } else {
                            (p.end_limit, (p.ux * p.len, p.uy * p.len))
                        };
                        let disc = overlap((t - tc).hypot(q), -r, r);
                        match limit {
                            Some((nx, ny, nlen)) => {
                                disc * overlap(
                                    (rx - vx) * nx + (ry - vy) * ny,
                                    f64::NEG_INFINITY,
                                    nlen,
                                )
                            }
                            None => disc,
                        }
                    };
                    if butt {
                        c *= overlap(t, a_lo, a_hi);
                    }
                    any |= raise(out, c);
                }
            }
            if any {
                self.touched(y, c0, c1);
            }
        }
    }

    /// Record that row `y`'s columns `c0..c1` hold coverage.
    #[inline]
    fn touched(&mut self, y: usize, c0: usize, c1: usize) {
        let e = &mut self.rows[y];
        e.0 = e.0.min(c0);
        e.1 = e.1.max(c1);
        self.span.0 = self.span.0.min(y);
        self.span.1 = self.span.1.max(y + 1);
    }

    /// Blend the buffer's coverage of opaque `color` onto `pm` (source-over, premultiplied) and
    /// clear the buffer.
    fn blend(&mut self, pm: &mut Pixmap, color: [u8; 3]) {
        let w = self.width;
        let data = pm.data_mut();
        let src = Packed::opaque(color);
        for y in self.span.0..self.span.1.min(self.rows.len()) {
            let (x0, x1) = std::mem::replace(&mut self.rows[y], (usize::MAX, 0));
            for x in x0..x1 {
                let i = y * w + x;
                let a = std::mem::take(&mut self.cov[i]);
                if a > 0 {
                    src.blend_onto(&mut data[i * 4..i * 4 + 4], a as u32);
                }
            }
        }
        self.span = (usize::MAX, 0);
    }
}

/// An opaque colour as the RGBA bytes of a pixel, split into its (red, blue) and (green,
/// alpha) byte pairs, each in a 16-bit lane, so that blending does two channels per multiply.
#[derive(Clone, Copy)]
pub struct Packed {
    rb: u32,
    ga: u32,
}

/// The low byte of each 16-bit lane.
const LANES: u32 = 0x00FF_00FF;

impl Packed {
    /// The colour `c`, opaque.
    pub fn opaque(c: [u8; 3]) -> Packed {
        let v = u32::from_le_bytes([c[0], c[1], c[2], 255]);
        Packed {
            rb: v & LANES,
            ga: (v >> 8) & LANES,
        }
    }

    /// Blend this colour at alpha `a` (0…255) over the premultiplied pixel `px`:
    /// px = (c·a + px·(255 − a)) / 255 per channel, rounded to the nearest level as
    /// (v + 128 + ((v + 128) >> 8)) >> 8. No lane overflows: 255·255 + 128 + 254 < 2¹⁶.
    #[inline(always)]
    pub fn blend_onto(self, px: &mut [u8], a: u32) {
        let Ok(bytes) = <[u8; 4]>::try_from(&*px) else {
            return;
        };
        let d = u32::from_le_bytes(bytes);
        let k = 255 - a.min(255);
        let a = 255 - k;
        let lane = |s: u32, d: u32| {
            let v = s * a + d * k + 0x0080_0080;
            ((v + ((v >> 8) & LANES)) >> 8) & LANES
        };
        let out = lane(self.rb, d & LANES) | (lane(self.ga, (d >> 8) & LANES) << 8);
        px.copy_from_slice(&out.to_le_bytes());
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn packed_blending_is_the_per_channel_formula() {
        // Source-over of an opaque colour at alpha a on premultiplied bytes (Porter & Duff
        // 1984), each channel rounded: (c·a + d·(255 − a)) / 255, with the alpha channel's
        // colour 255; checked over a spread of colours, pixels and alphas.
        let mut rng = fanmark_core::synth::rng::SplitMix64::new(7);
        for _ in 0..20_000 {
            let r = rng.next_u64().to_le_bytes();
            let (c, d, a) = ([r[0], r[1], r[2]], [r[3], r[4], r[5], r[6]], r[7] as u32);
            let mut px = d;
            Packed::opaque(c).blend_onto(&mut px, a);
            let src = [c[0], c[1], c[2], 255];
            for ch in 0..4 {
                let exact = (src[ch] as f64 * a as f64 + d[ch] as f64 * (255.0 - a as f64)) / 255.0;
                assert!(
                    (px[ch] as f64 - exact).abs() <= 0.5 + 1e-9,
                    "{c:?} over {d:?} at {a}: {px:?}"
                );
            }
        }
    }
    use fanmark_core::synth::rng::SplitMix64;

    const ALL: DeviceRect = (i64::MIN, i64::MIN, i64::MAX, i64::MAX);

    fn solid(width: f64) -> StrokeStyle<'static> {
        StrokeStyle {
            color: [20, 90, 200],
            width,
            dash: &[],
            closed: false,
        }
    }

    /// The same stroke through tiny-skia's general path stroker (butt caps, round joins).
    fn reference(pm: &mut Pixmap, points: &[(f64, f64)], style: &StrokeStyle) {
        let mut pb = tiny_skia::PathBuilder::new();
        pb.move_to(points[0].0 as f32, points[0].1 as f32);
        for p in &points[1..] {
            pb.line_to(p.0 as f32, p.1 as f32);
        }
        let path = pb.finish().unwrap();
        let mut paint = tiny_skia::Paint {
            anti_alias: true,
            ..Default::default()
        };
        let c = style.color;
        paint.set_color_rgba8(c[0], c[1], c[2], 255);
        let mut st = tiny_skia::Stroke {
            width: style.width as f32,
            line_join: tiny_skia::LineJoin::Round,
            line_cap: tiny_skia::LineCap::Butt,
            ..Default::default()
        };
        if !style.dash.is_empty() {
            let d = style.dash.iter().map(|v| *v as f32).collect();
            st.dash = tiny_skia::StrokeDash::new(d, 0.0);
        }
        pm.stroke_path(&path, &paint, &st, tiny_skia::Transform::identity(), None);
    }

    fn white(w: u32, h: u32) -> Pixmap {
        let mut pm = Pixmap::new(w, h).unwrap();
        pm.fill(tiny_skia::Color::WHITE);
        pm
    }

    fn random_polyline(rng: &mut SplitMix64, size: f64) -> Vec<(f64, f64)> {
        let n = 2 + (rng.uniform() * 5.0) as usize;
        (0..n)
            .map(|_| {
                (
                    10.0 + rng.uniform() * (size - 20.0),
                    10.0 + rng.uniform() * (size - 20.0),
                )
            })
            .collect()
    }

    /// Alpha summed over the pixmap, in pixels of full coverage.
    fn ink(pm: &Pixmap) -> f64 {
        pm.pixels().iter().map(|p| p.alpha() as f64 / 255.0).sum()
    }

    #[test]
    fn random_polylines_match_the_general_stroker_of_tiny_skia() {
        // Against an independent implementation (tiny-skia's stroker with its own super-sampled
        // coverage): over every pixel either drawer touched, the mean absolute difference per
        // channel stays under 3.5 levels of 255 (2.8 measured) and no channel differs by more
        // than 120 levels (105 measured: a corner of a butt cap across the pixel grid, where a
        // box filter and super-sampling disagree most).
        let mut rng = SplitMix64::new(7);
        let dashes: [&[f64]; 3] = [&[], &[9.0, 4.0], &[5.0, 2.5, 1.5, 2.5]];
        let (mut sum, mut count, mut worst) = (0.0, 0usize, 0u8);
        for case in 0..60 {
            let width = 1.2 + 4.8 * rng.uniform();
            let points = random_polyline(&mut rng, 160.0);
            let style = StrokeStyle {
                dash: dashes[case % 3],
                ..solid(width)
            };
            let (mut ours, mut theirs) = (white(160, 160), white(160, 160));
            draw_stroke(&mut ours, (0, 0), &points, &style, ALL);
            reference(&mut theirs, &points, &style);
            for (p, q) in ours.data().chunks(4).zip(theirs.data().chunks(4)) {
                if p == q && p[0] == 255 {
                    continue;
                }
                for k in 0..3 {
                    let d = p[k].abs_diff(q[k]);
                    sum += d as f64;
                    worst = worst.max(d);
                }
                count += 3;
            }
        }
        let mean = sum / count as f64;
        println!("against tiny-skia: mean {mean:.3} levels, worst {worst} over {count} values");
        assert!(count > 100_000, "only {count} channel values drawn");
        assert!(mean < 3.5, "mean absolute difference {mean:.2} levels");
        assert!(worst <= 120, "worst difference {worst} levels");
    }

    #[test]
    fn a_straight_line_deposits_length_times_width_and_dashes_their_share() {
        let mut pm = Pixmap::new(300, 120).unwrap();
        let line = [(20.3, 30.7), (280.1, 95.2)];
        draw_stroke(&mut pm, (0, 0), &line, &solid(3.4), ALL);
        let len = (259.8f64).hypot(64.5);
        let area = len * 3.4;
        assert!(
            (ink(&pm) - area).abs() < 0.01 * area,
            "{} vs {area}",
            ink(&pm)
        );
        let mut dashed = Pixmap::new(300, 120).unwrap();
        let style = StrokeStyle {
            dash: &[6.0, 2.0],
            ..solid(3.4)
        };
        draw_stroke(&mut dashed, (0, 0), &line, &style, ALL);
        let ratio = ink(&dashed) / ink(&pm);
        assert!((ratio - 0.75).abs() < 0.01, "dash share {ratio}");
    }

    #[test]
    fn dashes_run_on_along_the_arc_round_a_corner() {
        // Right then down: 25 px across, then 40 px down; dashes 7 on, 3 off. The pattern's phase
        // on the second leg is the arc length of the first (25 px: 2.5 periods).
        let points = [(10.0, 10.5), (35.0, 10.5), (35.0, 50.5)];
        let style = StrokeStyle {
            dash: &[7.0, 3.0],
            ..solid(2.0)
        };
        let mut pm = Pixmap::new(60, 60).unwrap();
        draw_stroke(&mut pm, (0, 0), &points, &style, ALL);
        let on = |s: f64| s.rem_euclid(10.0) < 7.0;
        let alpha = |x: u32, y: u32| pm.pixel(x, y).unwrap().alpha();
        let mut checked = 0;
        // The first leg, along row 10 (the centre line's pixel row).
        for x in 10..33u32 {
            let s = x as f64 + 0.5 - 10.0;
            let d = (s.rem_euclid(10.0)).min((s - 7.0).rem_euclid(10.0));
            if d.min(10.0 - d) < 1.0 {
                continue; // Within a pixel of a dash end: a partial pixel.
            }
            assert_eq!(alpha(x, 10) == 255, on(s), "first leg at s = {s}");
            checked += 1;
        }
        // The second leg, down column 35 (the centre line x = 35 is the column edge, so the
        // stroke covers columns 34 and 35 fully).
        for y in 13..50u32 {
            let s = 25.0 + y as f64 + 0.5 - 10.5;
            let d = s.rem_euclid(10.0).min((s - 7.0).rem_euclid(10.0));
            if d.min(10.0 - d) < 1.0 {
                continue;
            }
            assert_eq!(alpha(34, y) == 255, on(s), "second leg at s = {s}");
            assert_eq!(alpha(35, y) == 255, on(s), "second leg at s = {s}");
            checked += 1;
        }
        assert!(checked > 30, "{checked}");
    }

    #[test]
    fn the_clip_keeps_every_pixel_outside_it_and_changes_nothing_inside() {
        let mut rng = SplitMix64::new(11);
        for case in 0..10 {
            let points = random_polyline(&mut rng, 100.0);
            let style = StrokeStyle {
                dash: if case % 2 == 0 { &[] } else { &[4.0, 3.0] },
                ..solid(1.5 + 4.0 * rng.uniform())
            };
            let (mut full, mut clipped) = (white(100, 100), white(100, 100));
            let clip = (23, 31, 71, 64);
            draw_stroke(&mut full, (0, 0), &points, &style, ALL);
            draw_stroke(&mut clipped, (0, 0), &points, &style, clip);
            for y in 0..100 {
                for x in 0..100 {
                    let c = clipped.pixel(x, y).unwrap();
                    let inside = (23..71).contains(&x) && (31..64).contains(&y);
                    if inside {
                        assert_eq!(c, full.pixel(x, y).unwrap(), "({x}, {y})");
                    } else {
                        assert_eq!(c.red(), 255, "({x}, {y}) outside the clip drawn");
                        assert_eq!(c.green(), 255);
                    }
                }
            }
        }
    }

    #[test]
    fn one_band_and_four_bands_give_identical_bytes() {
        let mut rng = SplitMix64::new(3);
        let (w, h) = (130u32, 97u32);
        // Device pixels of the region, not starting at zero.
        let (ox, oy) = (40i64, 1013i64);
        let edges = [0u32, 23, 50, 51, 97];
        for case in 0..12 {
            let points: Vec<(f64, f64)> = random_polyline(&mut rng, 120.0)
                .into_iter()
                .map(|p| (p.0 + ox as f64 + 0.37, p.1 + oy as f64 - 8.0))
                .collect();
            let style = StrokeStyle {
                dash: if case % 2 == 0 { &[] } else { &[5.5, 2.25] },
                ..solid(1.2 + 4.8 * rng.uniform())
            };
            let mut one = white(w, h);
            draw_stroke(&mut one, (ox, oy), &points, &style, ALL);
            let mut drawn = 0;
            for b in edges.windows(2) {
                let mut band = white(w, b[1] - b[0]);
                draw_stroke(&mut band, (ox, oy + b[0] as i64), &points, &style, ALL);
                let stride = w as usize * 4;
                let rows = &one.data()[b[0] as usize * stride..b[1] as usize * stride];
                assert!(rows == band.data(), "case {case}: band {b:?} differs");
                drawn += band.pixels().iter().filter(|p| p.red() != 255).count();
            }
            assert!(drawn > 0, "case {case} drew nothing");
        }
    }

    #[test]
    fn a_path_over_itself_is_blended_once() {
        // Out and back along the same segment: away from the turning point every pixel is as
        // the single segment draws it (coverage united as a maximum, not blended twice).
        let (mut once, mut twice) = (white(80, 40), white(80, 40));
        let out = [(5.0, 12.3), (70.0, 27.9)];
        let back = [(5.0, 12.3), (70.0, 27.9), (5.0, 12.3)];
        draw_stroke(&mut once, (0, 0), &out, &solid(3.0), ALL);
        draw_stroke(&mut twice, (0, 0), &back, &solid(3.0), ALL);
        let mut partial = 0;
        for y in 0..40 {
            for x in 0..60 {
                let (a, b) = (once.pixel(x, y).unwrap(), twice.pixel(x, y).unwrap());
                assert_eq!(a, b, "({x}, {y})");
                partial += (a.red() != 255 && a.red() != 20) as usize;
            }
        }
        assert!(partial > 40, "{partial} edge pixels");
    }

    /// Time of 200 fan lines over a 2102 × 1417 page (the figure benchmark's size), 1.9 px
    /// wide, a third each solid, evenly dashed and dotted: this drawer against tiny-skia's
    /// stroker, one thread. Prints only; speed targets live in the benchmarks.
    /// `cargo test --release -p fanmark stroke_timing -- --ignored --nocapture`
    #[test]
    #[ignore]
    fn stroke_timing() {
        let (w, h) = (2102u32, 1417u32);
        let dashes: [&[f64]; 3] = [&[], &[12.5, 6.25], &[3.3, 5.0]];
        // Each line: from the fan's origin to a point on the top edge, with its dash.
        type FanLine<'a> = ([(f64, f64); 2], &'a [f64]);
        let lines: Vec<FanLine> = (0..200)
            .map(|k| {
                let top = 100.0 + 1900.0 * k as f64 / 199.0;
                ([(1051.0, 1400.0), (top, 20.0)], dashes[k % 3])
            })
            .collect();
        let time = |f: &mut dyn FnMut(&mut Pixmap)| {
            let mut best = f64::INFINITY;
            for _ in 0..5 {
                let mut pm = white(w, h);
                let t = std::time::Instant::now();
                f(&mut pm);
                best = best.min(t.elapsed().as_secs_f64() * 1e3);
            }
            best
        };
        let ours = time(&mut |pm| {
            for (points, dash) in &lines {
                let style = StrokeStyle {
                    dash,
                    ..solid(1.875)
                };
                draw_stroke(pm, (0, 0), points, &style, ALL);
            }
        });
        let theirs = time(&mut |pm| {
            for (points, dash) in &lines {
                let style = StrokeStyle {
                    dash,
                    ..solid(1.875)
                };
                reference(pm, points, &style);
            }
        });
        println!("200 lines: analytic {ours:.1} ms, tiny-skia {theirs:.1} ms (best of 5)");
    }

    #[test]
    fn bad_input_draws_nothing_and_does_not_panic() {
        let mut pm = white(30, 30);
        let before = pm.clone();
        let nan = [(f64::NAN, 3.0), (20.0, 20.0)];
        draw_stroke(&mut pm, (0, 0), &nan, &solid(3.0), ALL);
        let far = [(-1e300, -1e300), (-1e299, 1e301)];
        draw_stroke(&mut pm, (0, 0), &far, &solid(3.0), ALL);
        let ok = [(2.0, 2.0), (25.0, 20.0)];
        draw_stroke(&mut pm, (0, 0), &ok, &solid(0.0), ALL);
        draw_stroke(&mut pm, (0, 0), &ok, &solid(f64::INFINITY), ALL);
        let zeros = StrokeStyle {
            dash: &[0.0, 0.0],
            ..solid(2.0)
        };
        draw_stroke(&mut pm, (i64::MAX - 5, i64::MIN + 5), &ok, &zeros, ALL);
        assert!(pm.data() == before.data());
        // A zero-length "on" dash draws nothing with butt caps, as a path stroker does.
        let dots = StrokeStyle {
            dash: &[0.0, 3.0],
            ..solid(2.0)
        };
        draw_stroke(&mut pm, (0, 0), &ok, &dots, ALL);
        assert!(pm.data() == before.data());
    }
}

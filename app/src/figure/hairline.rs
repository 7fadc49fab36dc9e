//! Anti-aliased hairlines: polylines no wider than one device pixel drawn straight into a
//! premultiplied pixmap, one step along the major axis at a time, the coverage of each step
//! shared between the two pixels the line passes between (the usual two-pixel hairline). Dash
//! patterns are applied along the arc length, partial dashes by the fraction of the step they
//! cover. Far cheaper than stroking many short dashes one by one.

use super::stroke::Packed;
use tiny_skia::Pixmap;

/// Draw the polyline `points` (device px, in `pm`'s own pixel frame) in opaque `color` with
/// `coverage` (0…1: the line's width in px) and the dash pattern `dash` (device px, on/off
/// lengths, empty = solid; the pattern restarts at the first point), touching only the pixels
/// of the half-open rectangle `clip` (x0, y0, x1, y1).
pub fn draw_hairline(
    pm: &mut Pixmap,
    points: &[(f64, f64)],
    color: [u8; 3],
    coverage: f64,
    dash: &[f64],
    clip: (i64, i64, i64, i64),
) {
    let mut pattern = DashCursor::new(dash);
    let (w, h) = (pm.width() as i64, pm.height() as i64);
    let data = pm.data_mut();
    let cov = coverage.clamp(0.0, 1.0);
    // The clip inside the pixmap.
    let (kx0, ky0, kx1, ky1) = (clip.0.max(0), clip.1.max(0), clip.2.min(w), clip.3.min(h));
    let mut canvas = Canvas {
        data,
        width: w,
        clip: (kx0, ky0, kx1, ky1),
        src: Packed::opaque(color),
    };
    let mut arc = 0.0;
    for seg in points.windows(2) {
        let ((ax, ay), (bx, by)) = (seg[0], seg[1]);
        let (dx, dy) = (bx - ax, by - ay);
        let len = dx.hypot(dy);
        if !(len > 0.0) || !len.is_finite() {
            continue;
        }
        let steep = dy.abs() >= dx.abs();
        // Major axis u, minor axis v: u runs over whole pixels, v is interpolated.
        let (u0, u1, v0, dv) = if steep {
            (ay, by, ax, dx)
        } else {
            (ax, bx, ay, dy)
        };
        let du = u1 - u0;
        let (ulo, uhi) = (u0.min(u1), u0.max(u1));
        // The clip along the major axis u and the minor axis v.
        let (cu0, cu1, cv0, cv1) = if steep {
            (ky0, ky1, kx0, kx1)
        } else {
            (kx0, kx1, ky0, ky1)
        };
        // Only the stretch whose v comes within two pixels of the clip can plot anything.
        let (vlo, vhi) = (cv0 as f64 - 2.0, cv1 as f64 + 2.0);
        let (lo, hi) = if dv == 0.0 {
            if v0 < vlo || v0 > vhi {
                arc += len;
                continue;
            }
            (ulo, uhi)
        } else {
            let (ta, tb) = ((vlo - v0) / dv, (vhi - v0) / dv);
            let (ta, tb) = (ta.min(tb).max(0.0), ta.max(tb).min(1.0));
            let (ua, ub) = (u0 + du * ta, u0 + du * tb);
            (ulo.max(ua.min(ub)), uhi.min(ua.max(ub)))
        };
        let first = floor(lo).max(cu0 as f64) as i64;
        let last = ((-floor(-hi)).min(cu1 as f64) as i64).max(first);
        let inv = 1.0 / du;
        // Arc length per unit of u, and v per unit of u.
        let (arc_per_u, slope) = (len * inv.abs(), dv * inv);
        // The slabs [p, p + 1) wholly inside the segment: each takes 1/|du| of it, so its
        // coverage is the line's own and its middle moves by `slope` a step.
        let inner0 = ((-floor(-ulo)) as i64).clamp(first, last);
        let inner1 = (floor(uhi) as i64).clamp(inner0, last);
        // One slab with its parameter range found afresh (the ends of the segment): its
        // coverage and the v of its middle.
        let one = |p: i64, pattern: &mut Option<DashCursor>| -> Option<(f64, f64)> {
            let (ta, tb) = {
                let ta = (p as f64 - u0) * inv;
                let tb = (p as f64 + 1.0 - u0) * inv;
                (ta.min(tb).max(0.0), ta.max(tb).min(1.0))
            };
            if tb <= ta {
                return None;
            }
            let mut a = cov * (tb - ta) * du.abs();
            if let Some(d) = pattern.as_mut() {
                let (sa, sb) = (arc + ta * len, arc + tb * len);
                a *= on_share(d.on_between(sa, sb), sb - sa);
            }
            Some((a, v0 + dv * 0.5 * (ta + tb) - 0.5))
        };
        // Steps in the order of the arc (down u when the segment runs down), so that the dash
        // pattern is walked forwards: the end slabs one by one, the inner ones in a tight run.
        let forward = du > 0.0;
        let (head, tail) = if forward {
            (first..inner0, inner1..last)
        } else {
            (inner1..last, first..inner0)
        };
        let in_order = |r: &std::ops::Range<i64>, k: i64| {
            if forward {
                r.start + k
            } else {
                r.end - 1 - k
            }
        };
        for k in 0..(head.end - head.start).max(0) {
            let p = in_order(&head, k);
            if let Some((a, v)) = one(p, &mut pattern) {
                canvas.put(steep, p, a, v);
            }
        }
        if inner1 > inner0 {
            let n = inner1 - inner0;
            // The first inner slab in arc order, its arc length at entry and its v.
            let p_first = if forward { inner0 } else { inner1 - 1 };
            let entry = if forward { p_first } else { p_first + 1 };
            let s_at = arc + (entry as f64 - u0).abs() * arc_per_u;
            let (dp, dvs) = if forward { (1, slope) } else { (-1, -slope) };
            let v = v0 + slope * (p_first as f64 + 0.5 - u0) - 0.5;
            let run = Run {
                steep,
                p: p_first,
                dp,
                n,
                v,
                dv: dvs,
            };
            let total = alpha_of(cov);
            match pattern.as_mut() {
                None => canvas.run(&run, |_| (total, n)),
                Some(d) => canvas.run(&run, |k| {
                    // The first step finds its place in the pattern; the rest follow on.
                    let h = arc_per_u;
                    let on = if k == 0 {
                        d.on_step(s_at, h)
                    } else {
                        d.advance(h)
                    };
                    // A step wholly on or off needs no division, and the steps after it that
                    // lie wholly inside the same entry of the pattern share its coverage.
                    if on != 0.0 && on != h {
                        return (alpha_of(cov * on_share(on, h)), 1);
                    }
                    let more = d.pass_whole_steps(h, n - k - 1);
                    (if on == 0.0 { 0 } else { total }, 1 + more)
                }),
            }
        }
        for k in 0..(tail.end - tail.start).max(0) {
            let p = in_order(&tail, k);
            if let Some((a, v)) = one(p, &mut pattern) {
                canvas.put(steep, p, a, v);
            }
        }
        arc += len;
    }
}

/// The pixels a hairline is drawn into: premultiplied RGBA rows of `width` pixels, the clip
/// (x0, y0, x1, y1) inside them, and the line's colour.
struct Canvas<'a> {
    data: &'a mut [u8],
    width: i64,
    clip: (i64, i64, i64, i64),
    src: Packed,
}

impl Canvas<'_> {
    /// Blend the colour at alpha `a` (0…255) over pixel (x, y) if it lies in the clip.
    #[inline(always)]
    fn plot(&mut self, x: i64, y: i64, a: u32) {
        let (x0, y0, x1, y1) = self.clip;
        if x < x0 || y < y0 || x >= x1 || y >= y1 || a == 0 {
            return;
        }
        let i = ((y * self.width + x) * 4) as usize;
        if let Some(px) = self.data.get_mut(i..i + 4) {
            self.src.blend_onto(px, a);
        }
    }

    /// The steps of `run`, in stretches of equal coverage: `alpha(k)` gives the coverage
    /// (0…255) of step k and of how many steps from k on (at least one) share it. The
    /// minor-axis position is stepped in fixed point with 24 fractional bits (over 4096 steps
    /// it drifts less than 10⁻³ px), split between the two pixels in 1/256 steps as
    /// [`Self::put`] splits it. The pixel index moves by a fixed stride a step; only a step
    /// whose pair of pixels straddles the minor axis' clip is checked pixel by pixel. A stretch
    /// of zero coverage (the gaps of a dash) is passed over in one move. (A zero alpha leaves
    /// a pixel as it was, so it needs no test.)
    #[inline(always)]
    fn run(&mut self, r: &Run, mut alpha: impl FnMut(i64) -> (u32, i64)) {
        const ONE: f64 = (1u64 << 24) as f64;
        let (x0, y0, x1, y1) = self.clip;
        // The run's major-axis pixels lie inside the clip (the caller clamps them to it); its
        // first and last must lie inside the pixmap for the strides below to stay in it.
        let (plo, phi) = if r.steep { (y0, y1) } else { (x0, x1) };
        let p_last = r.p + r.dp * (r.n - 1);
        if r.n <= 0 || r.p.min(p_last) < plo || r.p.max(p_last) >= phi {
            return;
        }
        // The minor axis' clip, and the byte strides of one major and one minor step.
        let (lo, hi) = if r.steep { (x0, x1) } else { (y0, y1) };
        let row = self.width * 4;
        let (major, minor) = if r.steep {
            (r.dp * row, 4)
        } else {
            (r.dp * 4, row)
        };
        let mut at = if r.steep { r.p * row } else { r.p * 4 };
        let mut v = (r.v * ONE).round() as i64;
        let dv = (r.dv * ONE).round() as i64;
        let src = self.src;
        let mut k = 0;
        while k < r.n {
            let (total, count) = alpha(k);
            let count = count.clamp(1, r.n - k);
            k += count;
            if total == 0 {
                at += major * count;
                v += dv * count;
                continue;
            }
            for _ in 0..count {
                let q = v >> 24;
                let second = (total * ((v >> 16) & 0xFF) as u32 + 128) >> 8;
                let i = at + q * minor;
                if q >= lo && q + 1 < hi {
                    if let Some(px) = self.data.get_mut(i as usize..(i + minor + 4) as usize) {
                        let (a, b) = px.split_at_mut(minor as usize);
                        src.blend_onto(&mut a[..4], total - second);
                        src.blend_onto(&mut b[..4], second);
                    }
                } else {
                    for (q, i, a) in [(q, i, total - second), (q + 1, i + minor, second)] {
                        if q >= lo && q < hi {
                            if let Some(px) = self.data.get_mut(i as usize..i as usize + 4) {
                                src.blend_onto(px, a);
                            }
                        }
                    }
                }
                at += major;
                v += dv;
            }
        }
    }

    /// One step of a line at major-axis pixel `p` with coverage `a` (0…1) whose middle lies at
    /// `v` on the minor axis (x when `steep`): shared between the two pixels it passes between.
    /// The coverage is rounded to 0…255 once and split in 1/256 steps of the fraction, so the
    /// two pixels together get exactly the step's coverage.
    #[inline(always)]
    fn put(&mut self, steep: bool, p: i64, a: f64, v: f64) {
        let vf = floor(v);
        let q = vf as i64;
        let total = alpha_of(a);
        let second = (total * ((v - vf) * 256.0) as u32 + 128) >> 8;
        if steep {
            self.plot(q, p, total - second);
            self.plot(q + 1, p, second);
        } else {
            self.plot(p, q, total - second);
            self.plot(p, q + 1, second);
        }
    }
}

/// The steps of a line wholly inside one segment, in the order of the arc: the first major-axis
/// pixel `p`, `dp` (±1) a step, `n` steps, the minor-axis position `v` of the first step's
/// middle (less ½) and its change `dv` a step; `steep` when the major axis is y.
struct Run {
    steep: bool,
    p: i64,
    dp: i64,
    n: i64,
    v: f64,
    dv: f64,
}

/// Coverage 0…1 as an alpha 0…255, rounded.
#[inline(always)]
fn alpha_of(a: f64) -> u32 {
    (a.clamp(0.0, 1.0) * 255.0 + 0.5) as u32
}

/// The share `on / step` of a step that a dash covers, snapped to exactly 1 or 0 within 10⁻⁹:
/// a step wholly on or off then gets the same coverage however its arc length was summed
/// (a clipped line and the whole line agree to the bit inside the clip).
fn on_share(on: f64, step: f64) -> f64 {
    let f = on / step;
    if f > 1.0 - 1e-9 {
        1.0
    } else if f < 1e-9 {
        0.0
    } else {
        f
    }
}

/// A position in a dash pattern (on/off lengths, restarting at arc length 0), walked forwards
/// along the arc.
struct DashCursor<'a> {
    dash: &'a [f64],
    period: f64,
    /// Arc length the cursor stands at.
    at: f64,
    /// Entry of the pattern it stands in (even: on) and what is left of that entry.
    entry: usize,
    left: f64,
}

impl<'a> DashCursor<'a> {
    /// A cursor at arc length 0, or `None` for a solid line (fewer than two entries, a
    /// non-positive period or a negative or non-finite entry).
    fn new(dash: &'a [f64]) -> Option<DashCursor<'a>> {
        let period: f64 = dash.iter().sum();
        let usable = dash.len() >= 2
            && period > 0.0
            && period.is_finite()
            && dash.iter().all(|d| d.is_finite() && *d >= 0.0);
        usable.then(|| DashCursor {
            dash,
            period,
            at: 0.0,
            entry: 0,
            left: dash[0],
        })
    }

    /// Put the cursor at arc length `s` ≥ 0.
    fn seek(&mut self, s: f64) {
        // s ≥ 0, so truncation is the floor.
        let whole = (s / self.period) as i64 as f64;
        let mut rest = (s - whole * self.period).max(0.0);
        self.entry = 0;
        while rest >= self.dash[self.entry] && self.entry + 1 < self.dash.len() {
            rest -= self.dash[self.entry];
            self.entry += 1;
        }
        self.left = (self.dash[self.entry] - rest).max(0.0);
        self.at = s;
    }

    /// Length of "on" in the step of arc length `h` > 0 starting at `sa`, leaving the cursor at
    /// its end: [`Self::on_between`]`(sa, sa + h)`, with no walk when the step stays inside the
    /// entry the cursor stands in.
    fn on_step(&mut self, sa: f64, h: f64) -> f64 {
        let close = (sa - self.at).abs() <= 1e-9 * self.period.max(sa.abs());
        if close && self.left >= h {
            self.left -= h;
            self.at = sa + h;
            return if self.entry % 2 == 0 { h } else { 0.0 };
        }
        self.on_between(sa, sa + h)
    }

    /// Move the cursor over the steps of arc `h` > 0 that follow, at most `limit`, as long as
    /// each lies wholly inside the entry it stands in; how many it passed. (They are all on,
    /// or all off, as that entry is.)
    #[inline(always)]
    fn pass_whole_steps(&mut self, h: f64, limit: i64) -> i64 {
        let whole = ((self.left / h) as i64).clamp(0, limit.max(0));
        for _ in 0..whole {
            self.left -= h;
        }
        self.at += whole as f64 * h;
        whole
    }

    /// Length of "on" in the next `h` ≥ 0 of arc from where the cursor stands, leaving it at
    /// the end: [`Self::on_between`] without the check for a jump, for steps that follow on.
    #[inline(always)]
    fn advance(&mut self, h: f64) -> f64 {
        let mut todo = h;
        let mut on = 0.0;
        loop {
            let m = todo.min(self.left);
            if self.entry & 1 == 0 {
                on += m;
            }
            self.left -= m;
            todo -= m;
            if todo <= 0.0 {
                break;
            }
            self.entry += 1;
            if self.entry == self.dash.len() {
                self.entry = 0;
            }
            self.left = self.dash[self.entry];
        }
        self.at += h;
        on
    }

    /// Length of "on" between arc lengths `sa` ≤ `sb`, leaving the cursor at `sb`; a jump
    /// from where the cursor stood (a clipped stretch) seeks first.
    fn on_between(&mut self, sa: f64, sb: f64) -> f64 {
        if (sa - self.at).abs() > 1e-9 * self.period.max(sa.abs()) {
            self.seek(sa);
        }
        let mut todo = sb - sa;
        let mut on = 0.0;
        while todo > 0.0 {
            if self.left <= 0.0 {
                self.entry = (self.entry + 1) % self.dash.len();
                self.left = self.dash[self.entry];
                continue;
            }
            let m = todo.min(self.left);
            if self.entry % 2 == 0 {
                on += m;
            }
            self.left -= m;
            todo -= m;
        }
        self.at = sb;
        on
    }
}

/// `x.floor()` for finite `x` well inside the range of i64, without the library call (the
/// same value: truncation, one less where it rounded up).
fn floor(x: f64) -> f64 {
    let t = x as i64 as f64;
    if t > x {
        t - 1.0
    } else {
        t
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const ALL: (i64, i64, i64, i64) = (0, 0, i64::MAX, i64::MAX);

    fn alpha_sum(pm: &Pixmap) -> f64 {
        pm.pixels().iter().map(|p| p.alpha() as f64 / 255.0).sum()
    }

    #[test]
    fn a_line_deposits_its_length_times_its_width_and_dashes_their_share() {
        // Coverage of a thin line is its area, length × width; a 3-on 1-off dash keeps 3/4.
        let mut pm = Pixmap::new(200, 200).unwrap();
        draw_hairline(
            &mut pm,
            &[(10.3, 5.0), (150.7, 180.0)],
            [255, 0, 0],
            0.8,
            &[],
            ALL,
        );
        let len = (140.4f64).hypot(175.0);
        let major = 175.0;
        // Each step deposits the width along the major axis (the usual hairline rule).
        assert!(
            (alpha_sum(&pm) - 0.8 * major).abs() < 0.02 * major,
            "{}",
            alpha_sum(&pm)
        );
        let mut dashed = Pixmap::new(200, 200).unwrap();
        draw_hairline(
            &mut dashed,
            &[(10.3, 5.0), (150.7, 180.0)],
            [255, 0, 0],
            0.8,
            &[3.0, 1.0],
            ALL,
        );
        let ratio = alpha_sum(&dashed) / alpha_sum(&pm);
        assert!(
            (ratio - 0.75).abs() < 0.02,
            "dash ratio {ratio} over {len} px"
        );
        // Every drawn pixel lies within a pixel of the segment.
        for y in 0..200 {
            for x in 0..200 {
                if pm.pixel(x, y).unwrap().alpha() > 0 {
                    let t = (y as f64 + 0.5 - 5.0) / 175.0;
                    let cx = 10.3 + t * 140.4;
                    assert!((x as f64 + 0.5 - cx).abs() < 1.6, "({x}, {y}) vs {cx}");
                }
            }
        }
    }

    #[test]
    fn a_clip_changes_only_what_lies_outside_it() {
        // Shallow, steep, horizontal and vertical lines, solid and dashed: inside the clip every
        // pixel is as the unclipped line draws it, outside nothing is drawn.
        let lines: [&[(f64, f64)]; 4] = [
            &[(2.3, 40.2), (117.8, 61.9), (5.0, 70.4)],
            &[(60.2, 1.0), (52.7, 99.0)],
            &[(0.0, 48.5), (120.0, 48.5)],
            &[(41.5, 0.0), (41.5, 100.0)],
        ];
        let clip = (30, 45, 90, 66);
        for (k, line) in lines.iter().enumerate() {
            let dash: &[f64] = if k % 2 == 0 { &[] } else { &[4.0, 2.0] };
            let mut full = Pixmap::new(120, 100).unwrap();
            draw_hairline(&mut full, line, [0, 0, 255], 0.9, dash, ALL);
            let mut part = Pixmap::new(120, 100).unwrap();
            draw_hairline(&mut part, line, [0, 0, 255], 0.9, dash, clip);
            let mut inside = 0;
            for y in 0..100 {
                for x in 0..120 {
                    let p = part.pixel(x, y).unwrap();
                    if (30..90).contains(&x) && (45..66).contains(&y) {
                        assert_eq!(p, full.pixel(x, y).unwrap(), "line {k} at ({x}, {y})");
                        inside += (p.alpha() > 0) as usize;
                    } else {
                        assert_eq!(p.alpha(), 0, "line {k} drawn outside at ({x}, {y})");
                    }
                }
            }
            assert!(inside > 10, "line {k}: {inside} pixels inside");
        }
    }

    #[test]
    fn the_dash_cursor_measures_the_on_length_walking_and_jumping() {
        // Reference: the share of fine sub-steps whose middle falls in an "on" entry.
        let dash = [4.0, 2.0, 1.0, 2.0];
        let is_on = |s: f64| {
            let mut r = s % 9.0;
            for (i, d) in dash.iter().enumerate() {
                if r < *d {
                    return i % 2 == 0;
                }
                r -= d;
            }
            false
        };
        let reference = |a: f64, b: f64| {
            let n = 20_000;
            let h = (b - a) / n as f64;
            (0..n).filter(|&k| is_on(a + (k as f64 + 0.5) * h)).count() as f64 * h
        };
        let mut c = DashCursor::new(&dash).unwrap();
        // Steps of 0.7 from 0 to 30, then a jump to 100.25 and steps of 1.3, then back to 3.
        let mut pieces: Vec<(f64, f64)> = (0..43)
            .map(|k| (k as f64 * 0.7, (k + 1) as f64 * 0.7))
            .collect();
        pieces.extend((0..10).map(|k| (100.25 + k as f64 * 1.3, 100.25 + (k + 1) as f64 * 1.3)));
        pieces.push((3.0, 12.5));
        for (a, b) in pieces {
            let got = c.on_between(a, b);
            let want = reference(a, b);
            assert!((got - want).abs() < 1e-3, "[{a}, {b}]: {got} vs {want}");
        }
        assert!(DashCursor::new(&[3.0]).is_none());
        assert!(DashCursor::new(&[0.0, 0.0]).is_none());
        assert!(DashCursor::new(&[1.0, f64::NAN]).is_none());
    }

    #[test]
    fn the_fast_floor_is_the_floor() {
        for k in -4000..4000 {
            let x = k as f64 * 0.37 - 0.5;
            assert_eq!(floor(x).to_bits(), x.floor().to_bits(), "{x}");
        }
        for x in [-2.0, -1.0, -0.5, 0.0, 0.5, 1.0, 1e12 + 0.5, -1e12 - 0.5] {
            assert_eq!(floor(x), x.floor(), "{x}");
        }
    }

    #[test]
    fn lines_outside_the_pixmap_draw_nothing_and_do_not_panic() {
        let mut pm = Pixmap::new(20, 20).unwrap();
        draw_hairline(
            &mut pm,
            &[(-50.0, -50.0), (-10.0, 300.0)],
            [0, 0, 0],
            1.0,
            &[2.0, 1.0],
            ALL,
        );
        draw_hairline(
            &mut pm,
            &[(f64::NAN, 0.0), (5.0, 5.0)],
            [0, 0, 0],
            1.0,
            &[],
            ALL,
        );
        assert_eq!(alpha_sum(&pm), 0.0);
    }
}

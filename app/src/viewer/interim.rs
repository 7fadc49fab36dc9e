//! Interim frames: while a pan drag moves, wheel zoom events arrive quickly or a zoom or pan key
//! is held, the window shows the last settled picture moved (whole pixels) or scaled about the
//! cursor (nearest neighbour) instead of drawing afresh, and draws a settled frame once the
//! motion pauses. This module holds the pixel mapping of a zoom, the nearest-neighbour
//! resampling of the plot, [`shift_region`] that moves the plot of a pan, and [`Settle`], the
//! clock that decides between interim and settled frames.

use super::draw::Reuse;
use super::layers::PixelRect;
use super::state::Viewport;
use crate::figure::raster::par_rows;
use rayon::prelude::*;
use std::time::{Duration, Instant};
use tiny_skia::Pixmap;

/// Pause in a motion (pan drag or wheel zoom) after which the interim frames give way to a
/// settled frame drawn afresh.
pub const SETTLE_DELAY: Duration = Duration::from_millis(120);

/// Where a window pixel of the new view was in the last picture, per axis:
/// old = a · new + b (window pixel coordinates, continuous; pixel i spans i … i + 1).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PixelMap {
    /// (a, b) along x.
    pub x: (f64, f64),
    /// (a, b) along y (down).
    pub y: (f64, f64),
}

impl PixelMap {
    /// The mapping that takes the plot `r` (window pixels) showing the view `new` back to the
    /// same plot showing `old`; `None` for a degenerate view or plot.
    pub fn between(old: &Viewport, new: &Viewport, r: PixelRect) -> Option<PixelMap> {
        let (x0, y0) = (r.0 as f64, r.1 as f64);
        let (w, h) = ((r.2 - r.0) as f64, (r.3 - r.1) as f64);
        let (ow, oh) = (old.x1 - old.x0, old.y1 - old.y0);
        let (nw, nh) = (new.x1 - new.x0, new.y1 - new.y0);
        // Frame x of window x: new.x0 + (x − x0)/w · nw; its old window x: x0 + (fx − old.x0)/ow · w.
        let ax = nw / ow;
        let bx = x0 + (new.x0 - old.x0) / ow * w - x0 * ax;
        // Frame y of window y (down): new.y1 − (y − y0)/h · nh; old: y0 + (old.y1 − fy)/oh · h.
        let ay = nh / oh;
        let by = y0 + (old.y1 - new.y1) / oh * h - y0 * ay;
        let m = PixelMap {
            x: (ax, bx),
            y: (ay, by),
        };
        let ok = [ax, bx, ay, by].iter().all(|v| v.is_finite()) && ax > 0.0 && ay > 0.0;
        (ok && w > 0.0 && h > 0.0).then_some(m)
    }

    /// The last picture's pixel index holding the centre of pixel `i` along one axis.
    fn source(ab: (f64, f64), i: i64) -> i64 {
        (ab.0 * (i as f64 + 0.5) + ab.1).floor() as i64
    }
}

/// Fill the pixel rectangle `r` of `dst` with `src` (a picture of the same window) resampled
/// through `m`, nearest neighbour; where the mapped pixel falls outside `r`, `fill`.
pub fn scale_region(dst: &mut Pixmap, src: &Pixmap, r: PixelRect, m: &PixelMap, fill: [u8; 4]) {
    let (w, h) = (dst.width() as i64, dst.height() as i64);
    if src.width() != dst.width() || src.height() != dst.height() {
        return;
    }
    let (x0, y0, x1, y1) = (r.0.max(0), r.1.max(0), r.2.min(w), r.3.min(h));
    if x0 >= x1 || y0 >= y1 {
        return;
    }
    let inside = |v: i64, lo: i64, hi: i64| (v >= lo && v < hi).then_some(v as usize);
    // The source column of every destination column, found once for all rows.
    let cols: Vec<Option<usize>> = (x0..x1)
        .map(|x| inside(PixelMap::source(m.x, x), x0, x1))
        .collect();
    let stride = w as usize * 4;
    let sd = src.data();
    par_rows(dst, y0 as usize, y1 as usize).for_each(|(y, row)| {
        let out = &mut row[x0 as usize * 4..x1 as usize * 4];
        let Some(sy) = inside(PixelMap::source(m.y, y as i64), y0, y1) else {
            for px in out.chunks_exact_mut(4) {
                px.copy_from_slice(&fill);
            }
            return;
        };
        let srow = &sd[sy * stride..(sy + 1) * stride];
        for (px, col) in out.chunks_exact_mut(4).zip(&cols) {
            match *col {
                Some(sx) => px.copy_from_slice(&srow[sx * 4..sx * 4 + 4]),
                None => px.copy_from_slice(&fill),
            }
        }
    });
}

/// Fill the pixel rectangle `r` of `dst` with the same rectangle of `src` (a picture of the same
/// window) moved by `d` px; where the moved picture does not reach, `fill`. Rows in parallel,
/// each row's kept run copied in one piece.
pub fn shift_region(dst: &mut Pixmap, src: &Pixmap, r: PixelRect, d: (i64, i64), fill: [u8; 4]) {
    let (w, h) = (dst.width() as i64, dst.height() as i64);
    if src.width() != dst.width() || src.height() != dst.height() {
        return;
    }
    let (x0, y0, x1, y1) = (r.0.max(0), r.1.max(0), r.2.min(w), r.3.min(h));
    if x0 >= x1 || y0 >= y1 {
        return;
    }
    // Destination columns [k0, k1) come from source columns [k0 − d.0, k1 − d.0) inside r.
    let (k0, k1) = ((x0 + d.0).max(x0), (x1 + d.0).min(x1));
    let stride = w as usize * 4;
    let sd = src.data();
    let fill_px = |px: &mut [u8]| {
        for p in px.chunks_exact_mut(4) {
            p.copy_from_slice(&fill);
        }
    };
    par_rows(dst, y0 as usize, y1 as usize).for_each(|(y, row)| {
        let out = &mut row[x0 as usize * 4..x1 as usize * 4];
        let sy = y as i64 - d.1;
        if sy < y0 || sy >= y1 || k0 >= k1 {
            fill_px(out);
            return;
        }
        let (a, b) = ((k0 - x0) as usize * 4, (k1 - x0) as usize * 4);
        let s0 = sy as usize * stride + (k0 - d.0) as usize * 4;
        out[a..b].copy_from_slice(&sd[s0..s0 + (b - a)]);
        fill_px(&mut out[..a]);
        fill_px(&mut out[b..]);
    });
}

/// What keeps the window in interim frames.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Motion {
    /// A pan drag: interim while the drag goes on and moves.
    Pan,
    /// Wheel notches or a held zoom or pan key: interim until they pause.
    Steps,
}

/// The window's choice between interim and settled frames: each pan move, wheel event or
/// repeat of a held zoom or pan key puts off the settled frame by [`SETTLE_DELAY`].
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Settle {
    /// The last motion and when its settled frame is due.
    pending: Option<(Motion, Instant)>,
}

impl Settle {
    /// A pan move, a wheel event or a key repeat happened at `now`.
    pub fn moved(&mut self, motion: Motion, now: Instant) {
        self.pending = Some((motion, now + SETTLE_DELAY));
    }

    /// How the frame drawn at `now` may reuse the last picture; `panning` is true while a pan
    /// drag moves (a released drag settles at once).
    pub fn reuse(&self, now: Instant, panning: bool) -> Reuse {
        match self.pending {
            Some((m, due)) if now < due && (panning || m == Motion::Steps) => Reuse::Interim,
            _ => Reuse::Exact,
        }
    }

    /// When the window must wake to draw the settled frame.
    pub fn due(&self) -> Option<Instant> {
        self.pending.map(|(_, t)| t)
    }

    /// True, once, when the settled frame is due at `now` (the window then redraws).
    pub fn settle_now(&mut self, now: Instant) -> bool {
        match self.pending {
            Some((_, t)) if now >= t => {
                self.pending = None;
                true
            }
            _ => false,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_zoom_map_keeps_the_cursor_and_scales_distances_from_it() {
        let old = Viewport {
            x0: -40.0,
            x1: 40.0,
            y0: 0.5,
            y1: 9.0,
        };
        let r = (100, 50, 1100, 750);
        // Zoom ×2 about window pixel (350, 400): frame point under it, as the view state finds it.
        let (cx, cy) = (350.0, 400.0);
        let fx = old.x0 + (cx - 100.0) / 1000.0 * 80.0;
        let fy = old.y1 - (cy - 50.0) / 700.0 * 8.5;
        let new = Viewport {
            x0: fx - (fx - old.x0) / 2.0,
            x1: fx + (old.x1 - fx) / 2.0,
            y0: fy - (fy - old.y0) / 2.0,
            y1: fy + (old.y1 - fy) / 2.0,
        };
        let m = PixelMap::between(&old, &new, r).unwrap();
        for (px, want) in [(cx, cx), (cx + 100.0, cx + 50.0), (cx - 250.0, cx - 125.0)] {
            assert!((m.x.0 * px + m.x.1 - want).abs() < 1e-9, "{px}");
        }
        for (py, want) in [(cy, cy), (cy + 60.0, cy + 30.0)] {
            assert!((m.y.0 * py + m.y.1 - want).abs() < 1e-9, "{py}");
        }
        // A pan of the same size is a pure shift.
        let moved = Viewport {
            x0: old.x0 + 8.0,
            x1: old.x1 + 8.0,
            ..old
        };
        let m = PixelMap::between(&old, &moved, r).unwrap();
        assert!((m.x.0 - 1.0).abs() < 1e-12 && (m.x.1 - 100.0).abs() < 1e-9);
        assert!(PixelMap::between(&old, &new, (0, 0, 0, 10)).is_none());
    }

    #[test]
    fn scaling_resamples_nearest_and_fills_what_was_not_shown() {
        // A 12 × 10 window whose plot is columns 2…10, rows 1…9; pixel colour encodes (x, y).
        let mut src = Pixmap::new(12, 10).unwrap();
        for (i, px) in src.data_mut().chunks_exact_mut(4).enumerate() {
            px.copy_from_slice(&[(i % 12) as u8, (i / 12) as u8, 7, 255]);
        }
        let r = (2, 1, 10, 9);
        // Zoom out ×2 about (6, 5): new pixel x ↦ old 6 + (x + ½ − 6)·2.
        let m = PixelMap {
            x: (2.0, 6.0 - 12.0),
            y: (2.0, 5.0 - 10.0),
        };
        let mut dst = src.clone();
        scale_region(&mut dst, &src, r, &m, [40, 40, 40, 255]);
        let px = |p: &Pixmap, x: u32, y: u32| {
            let c = p.pixel(x, y).unwrap();
            [c.red(), c.green(), c.blue(), c.alpha()]
        };
        // (5, 4) ↦ (5, 4); (6, 5) ↦ (7, 6); (4, 3) ↦ (3, 2); (2, 1) ↦ (−1, −2): outside.
        assert_eq!(px(&dst, 5, 4), [5, 4, 7, 255]);
        assert_eq!(px(&dst, 6, 5), [7, 6, 7, 255]);
        assert_eq!(px(&dst, 4, 3), [3, 2, 7, 255]);
        assert_eq!(px(&dst, 2, 1), [40, 40, 40, 255]);
        // Outside the plot nothing changes.
        assert_eq!(px(&dst, 0, 0), [0, 0, 7, 255]);
        assert_eq!(px(&dst, 11, 9), [11, 9, 7, 255]);
    }

    #[test]
    fn shifting_moves_the_plot_by_whole_pixels_and_fills_what_came_into_view() {
        let mut src = Pixmap::new(12, 10).unwrap();
        for (i, px) in src.data_mut().chunks_exact_mut(4).enumerate() {
            px.copy_from_slice(&[(i % 12) as u8, (i / 12) as u8, 9, 255]);
        }
        let r = (2, 1, 10, 9);
        let fill = [40, 40, 40, 255];
        for d in [(3, -2), (-5, 1), (0, 0), (8, 0), (-1, 7), (0, -9)] {
            let mut dst = src.clone();
            shift_region(&mut dst, &src, r, d, fill);
            for y in 0..10i64 {
                for x in 0..12i64 {
                    let c = dst.pixel(x as u32, y as u32).unwrap();
                    let got = [c.red(), c.green(), c.blue(), c.alpha()];
                    let inside = |x: i64, y: i64| (2..10).contains(&x) && (1..9).contains(&y);
                    let (sx, sy) = (x - d.0, y - d.1);
                    let want = if !inside(x, y) {
                        [x as u8, y as u8, 9, 255]
                    } else if inside(sx, sy) {
                        [sx as u8, sy as u8, 9, 255]
                    } else {
                        fill
                    };
                    assert_eq!(got, want, "shift {d:?} at ({x}, {y})");
                }
            }
        }
    }

    #[test]
    fn wheel_events_keep_interim_frames_until_the_wheel_pauses() {
        let t0 = Instant::now();
        let ms = Duration::from_millis;
        let mut s = Settle::default();
        assert_eq!(s.reuse(t0, false), Reuse::Exact);
        s.moved(Motion::Steps, t0);
        assert_eq!(s.reuse(t0 + ms(30), false), Reuse::Interim);
        // Another notch 100 ms later puts the settled frame off again.
        s.moved(Motion::Steps, t0 + ms(100));
        assert_eq!(s.reuse(t0 + ms(180), false), Reuse::Interim);
        assert!(!s.settle_now(t0 + ms(180)));
        assert_eq!(s.due(), Some(t0 + ms(100) + SETTLE_DELAY));
        // The pause: settled from then on, and the wake-up is asked for once.
        let later = t0 + ms(100) + SETTLE_DELAY;
        assert_eq!(s.reuse(later, false), Reuse::Exact);
        assert!(s.settle_now(later));
        assert!(!s.settle_now(later + ms(5)));
        assert_eq!(s.due(), None);
        // A pan drag is interim only while the drag goes on.
        s.moved(Motion::Pan, t0);
        assert_eq!(s.reuse(t0 + ms(10), true), Reuse::Interim);
        assert_eq!(s.reuse(t0 + ms(10), false), Reuse::Exact);
    }
}

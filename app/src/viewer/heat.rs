//! The heat-map samples of a view: the shown channel sampled from its level-of-detail pyramid
//! on a regular grid over the viewport (one sample per plot pixel, centres at (i + ½)/n of the
//! view), the colour range of what is shown, and the reuse of the last samples after a pan: when
//! the new view's grid is the old grid moved by whole samples (same size, same pyramid level),
//! the kept samples are moved and only the strips that came into view are sampled.

use super::draw::x_axis_unit;
use super::state::{FrameKind, ScaleKind, ViewState, Viewport};
use crate::figure::scene::{ColorScale, HeatMap, Resample, ValueRange};
use fanmark_core::line::FramePoint;
use ndarray::{s, Array2};
use std::ops::Range;

/// Largest distance, in sample steps, between a kept sample's position and the position the
/// new view's grid puts it at for a pan to reuse it: rounding of the view's edges only.
const PAN_REUSE_TOLERANCE: f64 = 1e-9;

/// Centre of sample `i` (fractional allowed) of `n` equal samples between `a` and `b`.
fn centre(a: f64, b: f64, n: usize, i: f64) -> f64 {
    a + (i + 0.5) / n as f64 * (b - a)
}

/// Level-0 map cells per sample along the denser direction of a `w`×`h`-sample grid over the
/// view `v` of `s` (chooses the pyramid level).
fn cells_per_sample(s: &ViewState, v: &Viewport, w: usize, h: usize) -> f64 {
    let frame = s.core_frame();
    let (gx, gy) = (s.data.map.x(), s.data.map.y());
    let gate = s.data.gate;
    let span_v = {
        let a = frame.from_frame(FramePoint { x: v.x0, y: v.y1 });
        let b = frame.from_frame(FramePoint { x: v.x1, y: v.y1 });
        match (a, b) {
            (Ok(a), Ok(b)) => (gate.gate_for_density(a.0) - gate.gate_for_density(b.0)).abs(),
            _ => gx.max() - gx.min(),
        }
    };
    let cells_x = span_v / (gx.max() - gx.min()).max(1e-300) * gx.len() as f64 / w as f64;
    let cells_y = {
        let b0 = frame.field_of_y(v.y0).unwrap_or(gy.min());
        let b1 = frame.field_of_y(v.y1).unwrap_or(gy.max());
        (b1 - b0).abs() / (gy.max() - gy.min()).max(1e-300) * gy.len() as f64 / h as f64
    };
    cells_x.min(cells_y).max(1.0)
}

/// The samples `cols` × `rows` of the `w`×`h` grid over the view of `s` (row 0 at the bottom,
/// y increasing), each value × `factor`; shape (rows, columns). NaN where there is no data.
fn sample_block(
    s: &ViewState,
    (w, h): (usize, usize),
    cols: Range<usize>,
    rows: Range<usize>,
    factor: f64,
) -> Array2<f64> {
    let v = s.view;
    let xs: Vec<f64> = cols.map(|i| centre(v.x0, v.x1, w, i as f64)).collect();
    let ys: Vec<f64> = rows.map(|i| centre(v.y0, v.y1, h, i as f64)).collect();
    let shape = (ys.len(), xs.len());
    let Some(ch) = s.data.channel(s.channel) else {
        return Array2::from_elem(shape, f64::NAN);
    };
    let frame = s.core_frame();
    let (gx, gy) = (s.data.map.x(), s.data.map.y());
    let gate = s.data.gate;
    let cpp = cells_per_sample(s, &v, w, h);
    if matches!(
        s.frame,
        FrameKind::GateField | FrameKind::DensityField | FrameKind::Wannier
    ) {
        // In these frames x fixes the density and y the field: look each up once per column
        // and once per row instead of once per sample.
        let ym = 0.5 * (v.y0 + v.y1);
        let xm = 0.5 * (v.x0 + v.x1);
        let cols: Vec<Option<f64>> = xs
            .iter()
            .map(|&x| {
                let (n, _) = frame.from_frame(FramePoint { x, y: ym }).ok()?;
                gx.fractional_index(gate.gate_for_density(n))
            })
            .collect();
        let rows: Vec<Option<f64>> = ys
            .iter()
            .map(|&y| {
                let (_, b) = frame.from_frame(FramePoint { x: xm, y }).ok()?;
                gy.fractional_index(b)
            })
            .collect();
        let vals = ch.pyramid.sample_separable(&cols, &rows, cpp, factor);
        return Array2::from_shape_vec(shape, vals)
            .unwrap_or_else(|_| Array2::from_elem(shape, f64::NAN));
    }
    let mut vals = ch.pyramid.sample(shape.1, shape.0, cpp, &|c, r| {
        let (n, b) = frame.from_frame(FramePoint { x: xs[c], y: ys[r] }).ok()?;
        let fx = gx.fractional_index(gate.gate_for_density(n))?;
        let fy = gy.fractional_index(b)?;
        Some((fx, fy))
    });
    vals.mapv_inplace(|x| x * factor);
    vals
}

/// Sample the channel over the viewport at `w`×`h` points (row 0 = bottom, y increasing), in
/// the channel's SI unit: (values, sample x, sample y) in frame units.
pub fn sample_view(s: &ViewState, w: usize, h: usize) -> (Array2<f64>, Vec<f64>, Vec<f64>) {
    let v = s.view;
    let xs = (0..w).map(|i| centre(v.x0, v.x1, w, i as f64)).collect();
    let ys = (0..h).map(|i| centre(v.y0, v.y1, h, i as f64)).collect();
    (sample_block(s, (w, h), 0..w, 0..h, 1.0), xs, ys)
}

/// Samples of the view the colour range is found from, at most (about): the clipped percentiles
/// of 2¹⁶ evenly spread samples sit within a few hundredths of a percent of the whole view's.
const RANGE_SAMPLES: usize = 1 << 16;

/// Colour range (lo, hi) from a strided sample of `values`, clipping `clip_pct` % at each end;
/// signed channels get a range symmetric about zero. The stride never divides the row length,
/// so the sample walks across the columns instead of down a few of them.
pub fn colour_range(values: &Array2<f64>, clip_pct: f64, signed: bool, log: bool) -> (f64, f64) {
    let mut stride = (values.len() / RANGE_SAMPLES).max(1);
    let row = values.ncols().max(1);
    while stride > 1 && row % stride == 0 {
        stride += 1;
    }
    // Row-major, as the samples are kept: a slice steps over the values it skips in one move.
    let flat = values.as_standard_layout();
    let mut v: Vec<f64> = flat
        .as_slice()
        .unwrap_or_default()
        .iter()
        .step_by(stride)
        .copied()
        .filter(|x| x.is_finite() && (!log || *x > 0.0))
        .collect();
    if v.is_empty() {
        return (0.0, 1.0);
    }
    // The two order statistics by selection (linear time), as a full sort would give them.
    let rank = |p: f64| ((p / 100.0) * (v.len() - 1) as f64).round() as usize;
    let (ra, rb) = (rank(clip_pct), rank(100.0 - clip_pct));
    let (r_lo, r_hi) = (ra.min(rb), ra.max(rb));
    let (_, &mut a, upper) = v.select_nth_unstable_by(r_lo, f64::total_cmp);
    let b = if r_hi == r_lo {
        a
    } else {
        *upper
            .select_nth_unstable_by(r_hi - r_lo - 1, f64::total_cmp)
            .1
    };
    let (mut lo, mut hi) = if ra <= rb { (a, b) } else { (b, a) };
    if signed && !log {
        let m = lo.abs().max(hi.abs());
        lo = -m;
        hi = m;
    }
    if !(hi > lo) {
        let d = if lo == 0.0 { 1.0 } else { lo.abs() * 0.5 };
        return (lo - d, lo + d);
    }
    (lo, hi)
}

/// The heat map of the state at `w`×`h` samples (at least 2 × 2) with its resolved colours,
/// values in the channel's display unit.
pub fn heat_of(s: &ViewState, w: usize, h: usize) -> HeatMap {
    let (w, h) = (w.max(2), h.max(2));
    let vf = s.channel.label().1;
    heat_from(s, sample_block(s, (w, h), 0..w, 0..h, vf), (w, h))
}

/// The heat map of the state at `w`×`h` samples, reusing `old` — the heat map of the same
/// channel, palette, scale and clip sampled at the same grid size over the view `old_view` —
/// when the view only panned by whole samples (see [`pan_shift`]): the kept samples are moved
/// and only those that came into view are sampled. Equal to [`heat_of`] up to the rounding of
/// the sample positions (within 10⁻⁹ of a sample step). The flag says whether `old` was reused.
pub fn heat_after_pan(
    s: &ViewState,
    old_view: &Viewport,
    old: HeatMap,
    w: usize,
    h: usize,
) -> (HeatMap, bool) {
    let (w, h) = (w.max(2), h.max(2));
    let mut values = old.values;
    let shift = pan_shift(s, old_view, w, h).filter(|_| values.dim() == (h, w));
    let (Some((dx, dy)), Some(flat)) = (shift, values.as_slice_mut()) else {
        return (heat_of(s, w, h), false);
    };
    // New sample (r, c) is old sample (r + dy, c + dx): in row-major order a constant offset.
    let k = dy * w as i64 + dx;
    let n = k.unsigned_abs() as usize;
    if k > 0 {
        flat.copy_within(n.., 0);
    } else if k < 0 {
        flat.copy_within(..flat.len() - n, n);
    }
    let vf = s.channel.label().1;
    let (new_cols, kept_cols) = came_into_view(dx, w);
    let (new_rows, _) = came_into_view(dy, h);
    if !new_cols.is_empty() {
        let strip = sample_block(s, (w, h), new_cols.clone(), 0..h, vf);
        values.slice_mut(s![.., new_cols]).assign(&strip);
    }
    if !new_rows.is_empty() && !kept_cols.is_empty() {
        let strip = sample_block(s, (w, h), kept_cols.clone(), new_rows.clone(), vf);
        values.slice_mut(s![new_rows, kept_cols]).assign(&strip);
    }
    (heat_from(s, values, (w, h)), true)
}

/// The indices of `n` samples that came into view after a shift by `d` samples (new sample i
/// is old sample i + d), and those that were kept.
fn came_into_view(d: i64, n: usize) -> (Range<usize>, Range<usize>) {
    let m = (d.unsigned_abs() as usize).min(n);
    if d >= 0 {
        (n - m..n, 0..n - m)
    } else {
        (0..m, m..n)
    }
}

/// Whole samples (columns, rows) by which the `w`×`h`-sample grid moved from the view `old` to
/// the view of `s`: `Some` when both grids have the same step, every sample of the new grid sits
/// where one of the old grid sat (within [`PAN_REUSE_TOLERANCE`] of a step), they overlap, and
/// both sample the same pyramid level.
pub fn pan_shift(s: &ViewState, old: &Viewport, w: usize, h: usize) -> Option<(i64, i64)> {
    let new = s.view;
    let dx = axis_shift((old.x0, old.x1), (new.x0, new.x1), w)?;
    let dy = axis_shift((old.y0, old.y1), (new.y0, new.y1), h)?;
    let ch = s.data.channel(s.channel)?;
    let level = |v: &Viewport| ch.pyramid.level_for(cells_per_sample(s, v, w, h)).factor;
    (level(old) == level(&new)).then_some((dx, dy))
}

/// Whole samples by which `n` samples over `new` sit moved from `n` samples over `old` along
/// one axis, if they do (checked at both ends of the grid) and overlap.
fn axis_shift(old: (f64, f64), new: (f64, f64), n: usize) -> Option<i64> {
    let step = (old.1 - old.0) / n as f64;
    let d = ((new.0 - old.0) / step).round();
    if !(d.abs() < n as f64) {
        return None;
    }
    let ends = [0.0, (n - 1) as f64];
    let aligned = ends.iter().all(|&i| {
        let gap = centre(new.0, new.1, n, i) - centre(old.0, old.1, n, i + d);
        gap.abs() <= PAN_REUSE_TOLERANCE * step.abs()
    });
    aligned.then_some(d as i64)
}

/// The heat map of `values` (the `w`×`h` samples of the view of `s`, display unit): sample
/// coordinates, colour range, palette and scale.
fn heat_from(s: &ViewState, values: Array2<f64>, (w, h): (usize, usize)) -> HeatMap {
    let v = s.view;
    let fx = x_axis_unit(s.frame).1;
    let log = s.scale == ScaleKind::Log;
    let (lo, hi) = colour_range(&values, s.clip_pct, s.channel.signed(), log);
    let pal = &fanmark_core::palette::builtin()[s.palette % fanmark_core::palette::builtin().len()];
    let colors: Vec<[u8; 3]> = (0..256).map(|i| pal.sample(i as f64 / 255.0)).collect();
    let scale = match s.scale {
        ScaleKind::Linear => ColorScale::Linear,
        ScaleKind::Log => ColorScale::Log,
        ScaleKind::SymLog => ColorScale::SymLog {
            linear_threshold: (lo.abs().max(hi.abs()) / 30.0).max(1e-300),
        },
    };
    HeatMap {
        values,
        x: (0..w)
            .map(|i| centre(v.x0, v.x1, w, i as f64) * fx)
            .collect(),
        y: (0..h).map(|i| centre(v.y0, v.y1, h, i as f64)).collect(),
        colors,
        scale,
        range: ValueRange::Fixed(lo, hi),
        resample: Resample::Nearest,
        missing: Some([40, 40, 40]),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::figure::heatmap::{render_rgba, resolve_mapping};
    use crate::viewer::draw::Renderer;
    use crate::viewer::state::{Action, PlotArea};

    /// A view of the shared test fan in `frame`, zoomed in so that pans bring new data in.
    fn state(frame: FrameKind) -> ViewState {
        let mut s = ViewState::new(super::super::tests::data());
        s.apply(Action::PlotArea(PlotArea {
            x0: 0.0,
            y0: 0.0,
            x1: 400.0,
            y1: 300.0,
        }));
        s.apply(Action::SetFrame(frame));
        s.apply(Action::ZoomAt(200.0, 150.0, 2.5));
        s
    }

    /// The heat map's colours over its own sample grid (one pixel per sample).
    fn pixels(h: &HeatMap) -> Vec<u8> {
        let m = resolve_mapping(h).unwrap();
        let (w, n) = (h.x.len(), h.y.len());
        let half = |c: &[f64]| (c[1] - c[0]) / 2.0;
        let xe = (h.x[0] - half(&h.x), h.x[w - 1] + half(&h.x));
        let ye = (h.y[n - 1] + half(&h.y), h.y[0] - half(&h.y));
        render_rgba(h, &m, xe, ye, w as u32, n as u32)
    }

    /// Check a heat map made by moving samples against one sampled afresh: the values agree to
    /// 10⁻⁹ of the colour range (the kept samples were taken at positions the new grid puts
    /// within 10⁻⁹ of a step of theirs: rounding of the view's edges), and so the colours agree
    /// byte for byte except where a fresh value lies within that rounding of the edge between
    /// two colour-table entries (position · 255 within 10⁻⁶ of k + ½), where one step may flip.
    fn assert_same_heat(reused: &HeatMap, fresh: &HeatMap, what: &str) -> usize {
        let (ValueRange::Fixed(lo, hi), ValueRange::Fixed(lo2, hi2)) = (reused.range, fresh.range)
        else {
            panic!("{what}: fixed ranges expected");
        };
        let span = hi2 - lo2;
        assert!((lo - lo2).abs() <= 1e-9 * span && (hi - hi2).abs() <= 1e-9 * span);
        assert_eq!(reused.x.len(), fresh.x.len());
        let mut finite = 0;
        for (a, b) in reused.values.iter().zip(fresh.values.iter()) {
            assert_eq!(a.is_finite(), b.is_finite(), "{what}: {a} vs {b}");
            if b.is_finite() {
                assert!((a - b).abs() <= 1e-9 * span, "{what}: {a} vs {b}");
                finite += 1;
            }
        }
        let (p, q) = (pixels(reused), pixels(fresh));
        let m = resolve_mapping(fresh).unwrap();
        for (i, (a, b)) in p.chunks(4).zip(q.chunks(4)).enumerate() {
            if a != b {
                let v = fresh.values.as_slice().unwrap()[i];
                let t = m.position(v).unwrap() * 255.0;
                let off_edge = (t - t.floor() - 0.5).abs();
                assert!(
                    off_edge < 1e-6,
                    "{what}: pixel {i} {a:?} vs {b:?} (value {v})"
                );
            }
        }
        finite
    }

    #[test]
    fn the_sampled_colour_range_is_the_percentiles_of_the_whole_view() {
        // The clipped ends from the strided sample against the percentiles of all values by a
        // full sort (their definition): within 0.1 percentage points of rank, for a view of
        // rows whose columns differ (a stride dividing the row length would see few columns).
        let mut rng = fanmark_core::synth::rng::SplitMix64::new(11);
        let (h, w) = (900, 1600);
        let values = Array2::from_shape_fn((h, w), |(_, c)| {
            (c as f64 / w as f64).powi(3) * 1e4 + (rng.next_u64() % 1000) as f64
        });
        let mut all: Vec<f64> = values.iter().copied().collect();
        all.sort_by(f64::total_cmp);
        let rank_of = |x: f64| all.partition_point(|&v| v < x) as f64 / all.len() as f64 * 100.0;
        for clip in [0.5, 2.0, 10.0] {
            let (lo, hi) = colour_range(&values, clip, false, false);
            assert!(
                (rank_of(lo) - clip).abs() < 0.1,
                "clip {clip}: lo at {}",
                rank_of(lo)
            );
            assert!(
                (rank_of(hi) - (100.0 - clip)).abs() < 0.1,
                "clip {clip}: hi at {}",
                rank_of(hi)
            );
        }
    }

    #[test]
    fn pans_by_whole_samples_reuse_the_samples_and_equal_a_fresh_sampling() {
        for frame in [FrameKind::GateField, FrameKind::FillingField] {
            let mut s = state(frame);
            let (w, h) = (400, 300);
            let mut heat = heat_of(&s, w, h);
            let mut view = s.view;
            let mut reused = 0;
            // Right, left-and-up, down, a large jump, diagonal, and back past the start.
            for (dx, dy) in [
                (7.0, 0.0),
                (-3.0, 5.0),
                (0.0, -11.0),
                (250.0, 0.0),
                (-9.0, 4.0),
            ]
            .into_iter()
            .chain([(-240.0, -2.0), (1.0, 1.0)])
            {
                s.apply(Action::PanBy(dx, dy));
                let (next, moved) = heat_after_pan(&s, &view, heat, w, h);
                assert!(
                    moved,
                    "{frame:?}: a pan by ({dx}, {dy}) px reuses the samples"
                );
                reused += 1;
                let finite = assert_same_heat(&next, &heat_of(&s, w, h), &format!("{frame:?}"));
                assert!(finite > w * h / 4, "{frame:?}: {finite} samples with data");
                heat = next;
                view = s.view;
            }
            assert_eq!(reused, 7);
            // A sub-pixel pan, and a zoom, sample afresh.
            s.apply(Action::PanBy(0.5, 0.0));
            let (next, moved) = heat_after_pan(&s, &view, heat, w, h);
            assert!(!moved);
            assert_eq!(next.values, heat_of(&s, w, h).values);
            view = s.view;
            s.apply(Action::Zoom(1.1));
            assert!(!heat_after_pan(&s, &view, next, w, h).1);
        }
    }

    #[test]
    fn a_pan_off_the_whole_grid_samples_afresh() {
        let mut s = state(FrameKind::GateField);
        let (w, h) = (400, 300);
        let heat = heat_of(&s, w, h);
        let view = s.view;
        s.apply(Action::PanBy(400.0, 0.0));
        assert_eq!(pan_shift(&s, &view, w, h), None);
        assert!(!heat_after_pan(&s, &view, heat, w, h).1);
        s.apply(Action::PanBy(-399.0, 0.0));
        assert_eq!(pan_shift(&s, &view, w, h), Some((-1, 0)));
    }

    #[test]
    fn settled_pan_frames_reuse_the_heat_map_and_equal_fresh_frames() {
        let mut s = state(FrameKind::GateField);
        let (w, h) = (520, 380);
        let mut r = Renderer::default();
        r.render_settled(&mut s, w, h, 1.0).unwrap();
        for (dx, dy) in [(5.0, 0.0), (-12.0, 3.0), (0.0, -8.0)] {
            s.apply(Action::PanBy(dx, dy));
            let kept = r.render(&s, w, h).unwrap();
            let fresh = Renderer::default().render(&s, w, h).unwrap();
            let differ = kept
                .pixmap
                .data()
                .chunks(4)
                .zip(fresh.pixmap.data().chunks(4))
                .filter(|(a, b)| a != b)
                .count();
            assert_eq!(differ, 0, "pan ({dx}, {dy}): {differ} pixels differ");
        }
        assert_eq!(r.heat_reused, 3);
    }
}

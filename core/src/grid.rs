//! Gridding ragged sweeps onto a regular map without inventing data.
//!
//! Each sweep (e.g. one gate sweep at fixed field) is linearly interpolated along its swept
//! coordinate onto one common axis; nothing is extrapolated past a sweep's ends (NaN there);
//! a gap wider than 1.5 of a sweep's own median spacing (a dropped point) is not bridged; the
//! stepped coordinate keeps its measured values (a non-uniform axis). Sweeps at the same
//! stepped value are averaged. What was done is reported in a [`GridReport`].

use serde::{Deserialize, Serialize};

/// Choices for gridding.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct GridOptions {
    /// Spacing of the common swept axis in SI units; default: the median step of the data.
    pub step: Option<f64>,
    /// Set single-point glitches (see [`find_glitches`]) to NaN. Off by default: in coarsely
    /// sampled data a real feature one point wide looks the same, so glitches are only counted
    /// in the report unless asked.
    pub remove_glitches: bool,
    /// Two sweeps whose stepped values differ by less than this (SI) are the same row;
    /// default: 10⁻⁶ of the stepped range.
    pub step_tolerance: Option<f64>,
}

/// Hysteresis between up and down sweeps, estimated from the data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Hysteresis {
    /// Median shift of down-sweep features relative to up-sweep features along the swept axis
    /// (SI units of that axis; positive: features appear at larger values on the way down).
    pub shift: f64,
    /// Robust spread (1.4826 × median absolute deviation) of the per-pair shifts.
    pub spread: f64,
    /// Number of rows whose two neighbours were swept the other way (estimates combined).
    pub pairs: usize,
}

/// What gridding did.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct GridReport {
    /// Sweeps read.
    pub sweeps: usize,
    /// Rows in the map after merging sweeps at the same stepped value.
    pub rows: usize,
    /// Points on the common swept axis.
    pub columns: usize,
    /// Points read from the file.
    pub points_read: usize,
    /// Points dropped because a coordinate was NaN or not finite.
    pub points_dropped: usize,
    /// Points that repeated an earlier swept value in the same sweep and were averaged.
    pub duplicates_averaged: usize,
    /// Rows formed by averaging more than one sweep.
    pub rows_merged: usize,
    /// Single-point glitches found.
    pub glitches: usize,
    /// Whether the glitches were set to NaN (`GridOptions::remove_glitches`).
    pub glitches_removed: bool,
    /// Sweeps covering less than 80 % of the median sweep span (e.g. aborted).
    pub short_sweeps: usize,
    /// Grid cells left NaN per channel (outside a sweep's range, or NaN in the data).
    pub nan_cells: Vec<(String, usize)>,
    /// Spacing of the common swept axis (SI).
    pub step: f64,
    /// True if the data was already on one regular set of swept points, so the grid holds
    /// exactly the measured values with no interpolation.
    pub exact: bool,
    /// Up/down hysteresis estimate, when the sweeps alternate.
    pub hysteresis: Option<Hysteresis>,
    /// Glitch points set to NaN on an exact grid, with their measured values, so the original
    /// data stays recoverable: (row, column, channel index, value).
    pub removed: Vec<(usize, usize, usize, f64)>,
}

use crate::error::{Error, Result};
use crate::io::DuplicatePolicy;
use crate::map::{Axis, Channel, ChannelKind, Map, Quantity, RawPoints, RawSweep, SweepDirection};
use ndarray::Array2;
use rayon::prelude::*;

/// Ragged sweeps and what their coordinates and channels are: the input of [`grid_sweeps`].
#[derive(Debug, Clone)]
pub struct SweepSet {
    /// File or operation, for error messages.
    pub context: String,
    /// Name of the swept coordinate (e.g. the header `vg_V`).
    pub swept_name: String,
    /// What the swept coordinate measures.
    pub swept_quantity: Quantity,
    /// Name of the stepped coordinate.
    pub stepped_name: String,
    /// What the stepped coordinate measures.
    pub stepped_quantity: Quantity,
    /// Channels: (name, kind, unit for `Other` kinds — empty means the kind's SI unit).
    pub channels: Vec<(String, ChannelKind, String)>,
    /// The sweeps in measurement order.
    pub sweeps: Vec<RawSweep>,
}

/// One sweep after cleaning: sorted by the swept coordinate, duplicates averaged.
struct Clean {
    step: f64,
    direction: SweepDirection,
    x: Vec<f64>,
    v: Vec<Vec<f64>>,
    dropped: usize,
    duplicates: usize,
    glitches: usize,
    first_dup_line: Option<usize>,
}

fn median(v: &mut [f64]) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let mid = v.len() / 2;
    *v.select_nth_unstable_by(mid, |a, b| a.total_cmp(b)).1
}

fn clean_sweep(s: &RawSweep, remove_glitches: bool) -> Clean {
    let mut idx: Vec<usize> = (0..s.swept.len())
        .filter(|&i| s.swept[i].is_finite())
        .collect();
    let dropped = s.swept.len() - idx.len();
    idx.sort_by(|&a, &b| s.swept[a].total_cmp(&s.swept[b]));
    let nch = s.values.len();
    let mut x = Vec::with_capacity(idx.len());
    let mut v: Vec<Vec<f64>> = vec![Vec::with_capacity(idx.len()); nch];
    let mut duplicates = 0;
    let mut first_dup_line = None;
    let mut k = 0;
    while k < idx.len() {
        let x0 = s.swept[idx[k]];
        let mut e = k + 1;
        while e < idx.len() && s.swept[idx[e]] == x0 {
            e += 1;
        }
        if e - k > 1 {
            duplicates += e - k - 1;
            first_dup_line.get_or_insert(s.first_line + idx[k + 1]);
        }
        x.push(x0);
        for (c, out) in v.iter_mut().enumerate() {
            let (mut sum, mut n) = (0.0, 0usize);
            for &i in &idx[k..e] {
                let y = s.values[c][i];
                if y.is_finite() {
                    sum += y;
                    n += 1;
                }
            }
            out.push(if n > 0 { sum / n as f64 } else { f64::NAN });
        }
        k = e;
    }
    let mut glitches = 0;
    for ch in &mut v {
        let found = find_glitches(ch);
        glitches += found.len();
        if remove_glitches {
            for i in found {
                ch[i] = f64::NAN;
            }
        }
    }
    Clean {
        step: s.step_value,
        direction: s.direction,
        x,
        v,
        dropped,
        duplicates,
        glitches,
        first_dup_line,
    }
}

/// Single-point glitches: a point far from the cubic through its two neighbours on each side
/// (prediction (−y₋₂ + 4y₋₁ + 4y₊₁ − y₊₂)/6, exact on any cubic, so smooth flanks and peaks
/// leave no residual) — more than 25 robust standard deviations of the residuals around it
/// (±20 points, its own neighbourhood excluded), the largest residual within two points, and
/// clear of both neighbours by more than twice their difference. A lone spike, not a narrow
/// feature whose flanks are sampled.
pub fn find_glitches(y: &[f64]) -> Vec<usize> {
    let n = y.len();
    if n < 7 {
        return Vec::new();
    }
    // Residual of each point against the cubic through its neighbours (NaN at the ends).
    let mut res = vec![f64::NAN; n];
    for (k, w) in y.windows(5).enumerate() {
        res[k + 2] = w[2] - (-w[0] + 4.0 * w[1] + 4.0 * w[3] - w[4]) / 6.0;
    }
    // Noise is judged locally (±20 points): measured noise often scales with the signal, so
    // one figure for a whole sweep would call every point of a large peak a glitch.
    const HALF: usize = 20;
    let mut out = Vec::new();
    // First the cheap local tests, without branches so the loop runs at full speed:
    // a finite residual, the largest within two points (NaN neighbours do not count), and a
    // point clear of both neighbours by more than twice their own difference (a narrow real
    // peak rises through its neighbours, a spike jumps past).
    for (k, (rw, yw)) in res.windows(5).zip(y.windows(5)).enumerate() {
        let i = k + 2;
        let ri = rw[2].abs();
        let (a, b) = (yw[1], yw[3]);
        let excess = if rw[2] > 0.0 {
            yw[2] - a.max(b)
        } else {
            a.min(b) - yw[2]
        };
        let pass = ri.is_finite()
            & !(rw[0].abs() > ri)
            & !(rw[1].abs() > ri)
            & !(rw[3].abs() > ri)
            & !(rw[4].abs() > ri)
            & (excess > 2.0 * (b - a).abs())
            & (excess > 0.0);
        if !pass {
            continue;
        }
        // The robust noise σ = 1.4826 · median |residual| of the neighbourhood (its own
        // ±2 points excluded). The spike must exceed 25 σ in residual and in excess, and σ
        // must be positive. Since σ(v) grows with v, "median satisfies it" is "more than
        // half of the values satisfy it": counted, not sorted.
        let (lo, hi) = (i.saturating_sub(HALF), (i + HALF).min(n - 1));
        let (mut finite, mut below, mut zero) = (0usize, 0usize, 0usize);
        let mut count = |side: &[f64]| {
            for &v in side {
                let v = v.abs();
                let sigma = 1.4826 * v;
                let f = v.is_finite();
                finite += usize::from(f);
                below += usize::from(f & (ri > 25.0 * sigma) & (excess > 25.0 * sigma));
                zero += usize::from(f & !(sigma > 0.0));
            }
        };
        count(&res[lo..i - 2]);
        count(&res[i + 3..=hi]);
        let mid = finite / 2;
        if finite >= 8 && below > mid && zero <= mid {
            out.push(i);
        }
    }
    out
}

/// Linear interpolation of one cleaned sweep onto `grid`, NaN outside its ends and across gaps
/// wider than `max_gap` (a missing point is never bridged).
fn interpolate_row(x: &[f64], y: &[f64], grid: &[f64], max_gap: f64, out: &mut [f64]) {
    out.fill(f64::NAN);
    if x.is_empty() {
        return;
    }
    let (lo, hi) = (x[0], x[x.len() - 1]);
    let start = grid.partition_point(|&g| g < lo);
    let mut j = 0;
    for (k, &g) in grid.iter().enumerate().skip(start) {
        if g > hi {
            break;
        }
        while j + 1 < x.len() && x[j + 1] < g {
            j += 1;
        }
        if x[j] == g || x.len() == 1 {
            out[k] = y[j];
            continue;
        }
        if j + 1 >= x.len() {
            if x[j] == g {
                out[k] = y[j];
            }
            continue;
        }
        let (x0, x1) = (x[j], x[j + 1]);
        if x1 == g {
            out[k] = y[j + 1];
        } else if x1 - x0 <= max_gap {
            let t = (g - x0) / (x1 - x0);
            out[k] = y[j] + t * (y[j + 1] - y[j]);
        }
    }
}

/// If every sweep's points lie on the points of the longest sweep (to 10⁻⁶ of its step), the
/// data was regular: return that common axis.
fn common_exact_axis(cleaned: &[Clean]) -> Option<Vec<f64>> {
    let longest = cleaned.iter().max_by_key(|c| c.x.len())?;
    let axis = longest.x.clone();
    if axis.len() < 2 {
        return None;
    }
    let mut steps: Vec<f64> = axis.windows(2).map(|w| w[1] - w[0]).collect();
    let tol = 1e-6 * median(&mut steps);
    let ok = cleaned.par_iter().all(|c| {
        if c.x.len() == axis.len() {
            return c.x.iter().zip(&axis).all(|(a, b)| (a - b).abs() <= tol);
        }
        let mut j = 0;
        c.x.iter().all(|&v| {
            while j < axis.len() && axis[j] < v - tol {
                j += 1;
            }
            j < axis.len() && (axis[j] - v).abs() <= tol
        })
    });
    ok.then_some(axis)
}

/// Estimate up/down hysteresis from each row and its two neighbours of the opposite
/// direction. A neighbour's shift relative to the row (the offset that best aligns it, in grid
/// steps refined by a parabola) is ±h plus a drift of the features with field; interpolating
/// the two neighbours' shifts to the row's own field cancels the drift (exactly when it is
/// linear in field, whatever the field steps), leaving the hysteresis h: the shift of
/// down-sweep features relative to up-sweep features.
fn hysteresis_of_rows(
    data: &Array2<f64>,
    dirs: &[SweepDirection],
    fields: &[f64],
    step: f64,
) -> Option<Hysteresis> {
    use SweepDirection::{Down, Up};
    const K: isize = 12;
    // Rows swept down between two swept up (or the reverse) carry the estimate.
    let triples: Vec<(usize, f64)> = (1..dirs.len().saturating_sub(1))
        .filter_map(|k| match (dirs[k - 1], dirs[k], dirs[k + 1]) {
            (Down, Up, Down) => Some((k, 1.0)),
            (Up, Down, Up) => Some((k, -1.0)),
            _ => None,
        })
        .collect();
    if triples.is_empty() {
        return None;
    }
    // Compare rows in log scale so every feature counts, not only the largest peak (a channel
    // with signed values, such as R_xy, is compared as it is).
    let positive = data.iter().all(|v| !(*v <= 0.0));
    let row = |k: usize| -> Vec<f64> {
        data.row(k)
            .iter()
            .map(|&v| if positive { v.ln() } else { v })
            .collect()
    };
    // Offset s (SI) such that `other(x) ≈ base(x − s)`.
    let shift_of = |base: &[f64], other: &[f64]| -> Option<f64> {
        let n = base.len() as isize;
        let sse = |k: isize| -> Option<f64> {
            let (mut s, mut c) = (0.0, 0usize);
            for i in K..n - K {
                let (o, b) = (other[i as usize], base[(i - k) as usize]);
                if o.is_finite() && b.is_finite() {
                    s += (o - b) * (o - b);
                    c += 1;
                }
            }
            (c > 20).then(|| s / c as f64)
        };
        let costs: Vec<Option<f64>> = (-K..=K).map(sse).collect();
        let (bi, best) = costs
            .iter()
            .enumerate()
            .filter_map(|(i, c)| c.map(|c| (i, c)))
            .min_by(|a, b| a.1.total_cmp(&b.1))?;
        if bi == 0 || bi == costs.len() - 1 {
            return None;
        }
        let (l, r) = (costs[bi - 1]?, costs[bi + 1]?);
        let denom = l - 2.0 * best + r;
        let frac = if denom > 0.0 {
            0.5 * (l - r) / denom
        } else {
            0.0
        };
        Some(((bi as isize - K) as f64 + frac) * step)
    };
    let est: Vec<f64> = triples
        .par_iter()
        .filter_map(|&(k, sign)| {
            let (d1, d2) = (fields[k] - fields[k - 1], fields[k + 1] - fields[k]);
            if !(d1 > 0.0 && d2 > 0.0) {
                return None;
            }
            let base = row(k);
            let sa = shift_of(&base, &row(k - 1))?;
            let sb = shift_of(&base, &row(k + 1))?;
            Some(sign * (sa * d2 + sb * d1) / (d1 + d2))
        })
        .collect();
    if est.is_empty() {
        return None;
    }
    let shift = median(&mut est.clone());
    let mut dev: Vec<f64> = est.iter().map(|s| (s - shift).abs()).collect();
    Some(Hysteresis {
        shift,
        spread: 1.4826 * median(&mut dev),
        pairs: est.len(),
    })
}

/// Put ragged sweeps on a regular grid (see the module documentation). `swept_on_x` puts the
/// swept coordinate on the map's x axis (columns); otherwise the result is transposed so the
/// stepped coordinate is on x.
pub fn grid_sweeps(
    set: SweepSet,
    swept_on_x: bool,
    opts: &GridOptions,
    duplicates: DuplicatePolicy,
) -> Result<Map> {
    let SweepSet {
        context,
        swept_name,
        swept_quantity,
        stepped_name,
        stepped_quantity,
        channels,
        sweeps,
    } = set;
    let bad_axis = |axis: &str, message: String| Error::BadAxis {
        context: context.clone(),
        axis: axis.to_string(),
        message,
    };
    let points_read: usize = sweeps.iter().map(|s| s.swept.len()).sum();
    if opts.step.is_none() {
        if let Some(axis) = regular_axis(&sweeps, opts.step_tolerance) {
            let parts = FastParts {
                swept_name,
                swept_quantity,
                stepped_name,
                stepped_quantity,
                channels,
            };
            return grid_regular(parts, sweeps, axis, swept_on_x, opts, points_read);
        }
    }
    let mut cleaned: Vec<Clean> = sweeps
        .par_iter()
        .map(|s| clean_sweep(s, opts.remove_glitches))
        .collect();
    // Sweeps whose stepped coordinate is NaN cannot be placed.
    let before = cleaned.len();
    let mut dropped_points: usize = cleaned
        .iter()
        .filter(|c| !c.step.is_finite())
        .map(|c| c.x.len())
        .sum();
    cleaned.retain(|c| c.step.is_finite() && !c.x.is_empty());
    let dropped_sweeps = before - cleaned.len();
    dropped_points += cleaned.iter().map(|c| c.dropped).sum::<usize>();
    if cleaned.is_empty() {
        return Err(bad_axis(
            &swept_name,
            "no sweep has a finite coordinate".into(),
        ));
    }
    let dup_total: usize = cleaned.iter().map(|c| c.duplicates).sum();
    if dup_total > 0 && duplicates == DuplicatePolicy::Error {
        let line = cleaned
            .iter()
            .filter_map(|c| c.first_dup_line)
            .min()
            .unwrap_or(0);
        return Err(Error::DuplicatePoints {
            path: context.clone().into(),
            count: dup_total,
            line,
            axes: format!("{swept_name}, {stepped_name}"),
        });
    }
    // The common swept axis.
    let exact = match opts.step {
        Some(_) => None,
        None => common_exact_axis(&cleaned),
    };
    // Each sweep's mean spacing (its span over its intervals) is unbiased by point jitter,
    // unlike the median of neighbour distances.
    let mut all_steps: Vec<f64> = cleaned
        .iter()
        .filter(|c| c.x.len() > 2)
        .map(|c| (c.x[c.x.len() - 1] - c.x[0]) / (c.x.len() - 1) as f64)
        .collect();
    let step = match opts.step {
        Some(s) if s > 0.0 && s.is_finite() => s,
        Some(s) => {
            return Err(Error::invalid(
                "grid step",
                format!("{s} is not a positive finite spacing"),
            ))
        }
        None => median(&mut all_steps),
    };
    let grid: Vec<f64> = match &exact {
        Some(a) => a.clone(),
        None => {
            if !(step > 0.0) {
                return Err(bad_axis(
                    &swept_name,
                    "every sweep has a single point, so no spacing can be chosen".into(),
                ));
            }
            let lo = cleaned.iter().map(|c| c.x[0]).fold(f64::INFINITY, f64::min);
            let hi = cleaned
                .iter()
                .map(|c| c.x[c.x.len() - 1])
                .fold(f64::NEG_INFINITY, f64::max);
            // Anchor the grid where the sweeps typically start, so grid points sit on the
            // nominal measurement points; extend it to cover every sweep.
            let mut starts: Vec<f64> = cleaned.iter().map(|c| c.x[0]).collect();
            let anchor = median(&mut starts);
            let k_lo = ((lo - anchor) / step).ceil();
            let k_lo = if anchor + (k_lo - 1.0) * step >= lo - 1e-9 * step {
                k_lo - 1.0
            } else {
                k_lo
            };
            let lo = anchor + k_lo * step;
            let n = ((hi - lo) / step + 1e-9).floor() as usize + 1;
            if n > 50_000_000 {
                return Err(Error::invalid(
                    "grid step",
                    format!("{step} gives {n} points over [{lo}, {hi}]; give a larger step"),
                ));
            }
            (0..n).map(|i| lo + step * i as f64).collect()
        }
    };
    let spans: Vec<f64> = cleaned
        .iter()
        .map(|c| c.x[c.x.len() - 1] - c.x[0])
        .collect();
    let median_span = median(&mut spans.clone());
    let short_sweeps = spans.iter().filter(|&&s| s < 0.8 * median_span).count();
    // Order sweeps by stepped value (stable: file order within equal values) and group rows.
    let span_step = {
        let lo = cleaned.iter().map(|c| c.step).fold(f64::INFINITY, f64::min);
        let hi = cleaned
            .iter()
            .map(|c| c.step)
            .fold(f64::NEG_INFINITY, f64::max);
        hi - lo
    };
    let tol = opts.step_tolerance.unwrap_or(1e-6 * span_step);
    let mut order: Vec<usize> = (0..cleaned.len()).collect();
    order.sort_by(|&a, &b| cleaned[a].step.total_cmp(&cleaned[b].step));
    let mut groups: Vec<Vec<usize>> = Vec::new();
    for i in order {
        match groups.last_mut() {
            Some(g) if (cleaned[i].step - cleaned[g[0]].step).abs() <= tol => g.push(i),
            _ => groups.push(vec![i]),
        }
    }
    let nch = channels.len();
    let ncol = grid.len();
    let nrow = groups.len();
    // Never bridge a missing point: a gap wider than 1.5 of the sweep's own median spacing
    // stays NaN.
    let max_gaps: Vec<f64> = cleaned
        .iter()
        .map(|c| {
            let mut d: Vec<f64> = c.x.windows(2).map(|w| w[1] - w[0]).collect();
            1.5 * median(&mut d)
        })
        .collect();
    // Grid each row straight into the channel arrays, averaging the sweeps of a group.
    let mut data: Vec<Array2<f64>> = (0..nch)
        .map(|_| Array2::from_elem((nrow, ncol), f64::NAN))
        .collect();
    for (ch, arr) in data.iter_mut().enumerate() {
        arr.axis_iter_mut(ndarray::Axis(0))
            .into_par_iter()
            .zip(groups.par_iter())
            .for_each(|(mut out, g)| {
                let out = out
                    .as_slice_mut()
                    .expect("rows of a standard array are contiguous");
                if g.len() == 1 {
                    let c = &cleaned[g[0]];
                    interpolate_row(&c.x, &c.v[ch], &grid, max_gaps[g[0]], out);
                    return;
                }
                let mut sum = vec![0.0; ncol];
                let mut cnt = vec![0u32; ncol];
                let mut tmp = vec![f64::NAN; ncol];
                for &i in g {
                    let c = &cleaned[i];
                    interpolate_row(&c.x, &c.v[ch], &grid, max_gaps[i], &mut tmp);
                    for k in 0..ncol {
                        if tmp[k].is_finite() {
                            sum[k] += tmp[k];
                            cnt[k] += 1;
                        }
                    }
                }
                for k in 0..ncol {
                    out[k] = if cnt[k] > 0 {
                        sum[k] / cnt[k] as f64
                    } else {
                        f64::NAN
                    };
                }
            });
    }
    let mut row_values = Vec::with_capacity(nrow);
    let mut row_dirs = Vec::with_capacity(nrow);
    let mut rows_merged = 0;
    for g in &groups {
        row_values.push(g.iter().map(|&i| cleaned[i].step).sum::<f64>() / g.len() as f64);
        let d0 = cleaned[g[0]].direction;
        row_dirs.push(if g.len() == 1 {
            d0
        } else {
            SweepDirection::Unknown
        });
        if g.len() > 1 {
            rows_merged += 1;
        }
    }
    let glitches = cleaned.iter().map(|c| c.glitches).sum();
    drop(cleaned);
    let hysteresis = data
        .first()
        .and_then(|d| hysteresis_of_rows(d, &row_dirs, &row_values, step));
    let swept_axis = Axis::new(swept_name.clone(), swept_quantity, grid)
        .map_err(|e| bad_axis(&swept_name, e.to_string()))?;
    let stepped_axis = Axis::new(stepped_name.clone(), stepped_quantity, row_values)
        .map_err(|e| bad_axis(&stepped_name, e.to_string()))?;
    let mut map = assemble_map(swept_axis, stepped_axis, channels, data, swept_on_x)?;
    let report = GridReport {
        sweeps: sweeps.len(),
        rows: nrow,
        columns: ncol,
        points_read,
        points_dropped: dropped_points,
        duplicates_averaged: dup_total,
        rows_merged,
        glitches,
        glitches_removed: opts.remove_glitches,
        short_sweeps,
        nan_cells: map.nan_counts(),
        step,
        exact: exact.is_some() && rows_merged == 0 && dup_total == 0 && glitches == 0,
        hysteresis,
        removed: Vec::new(),
    };
    if swept_on_x {
        map.meta.row_directions = row_dirs;
    } else {
        map.meta.row_directions = vec![SweepDirection::Unknown; map.shape().0];
        map.meta.notes.push(format!(
            "sweeps ran along {} (the y axis); columns are the sweeps",
            swept_name
        ));
    }
    if dropped_sweeps > 0 {
        map.meta.notes.push(format!(
            "{dropped_sweeps} sweeps had no finite {stepped_name} value and were dropped"
        ));
    }
    map.raw = if report.exact {
        RawPoints::GridIsExact
    } else {
        RawPoints::Sweeps {
            swept_axis: if swept_on_x { 'x' } else { 'y' },
            sweeps,
        }
    };
    map.meta.gridding = Some(report);
    Ok(map)
}

/// Names and kinds carried to the regular-grid path.
struct FastParts {
    swept_name: String,
    swept_quantity: Quantity,
    stepped_name: String,
    stepped_quantity: Quantity,
    channels: Vec<(String, ChannelKind, String)>,
}

/// The common swept axis when the file is already a regular grid: every sweep strictly
/// monotone with finite coordinates, every sweep's points a contiguous run of the longest
/// sweep's points (to 10⁻⁶ of the step), and every stepped value distinct.
fn regular_axis(sweeps: &[RawSweep], step_tol: Option<f64>) -> Option<Vec<f64>> {
    let longest = sweeps.iter().max_by_key(|s| s.swept.len())?;
    if longest.swept.len() < 2 {
        return None;
    }
    let mut axis = longest.swept.clone();
    if axis[0] > axis[axis.len() - 1] {
        axis.reverse();
    }
    if axis.windows(2).any(|w| !(w[1] > w[0])) {
        return None;
    }
    let mut d: Vec<f64> = axis.windows(2).map(|w| w[1] - w[0]).collect();
    let tol = 1e-6 * median(&mut d);
    let ok = sweeps.par_iter().all(|s| {
        let x = &s.swept;
        if x.is_empty() || !s.step_value.is_finite() {
            return false;
        }
        let up = x.len() == 1 || x[x.len() - 1] > x[0];
        let first = if up { x[0] } else { x[x.len() - 1] };
        let Some(j0) = axis.iter().position(|&a| (a - first).abs() <= tol) else {
            return false;
        };
        if j0 + x.len() > axis.len() {
            return false;
        }
        (0..x.len()).all(|k| {
            let v = if up { x[k] } else { x[x.len() - 1 - k] };
            (v - axis[j0 + k]).abs() <= tol
        })
    });
    if !ok {
        return None;
    }
    let mut steps: Vec<f64> = sweeps.iter().map(|s| s.step_value).collect();
    steps.sort_by(f64::total_cmp);
    let span = steps[steps.len() - 1] - steps[0];
    let st = step_tol.unwrap_or(1e-6 * span);
    if steps.windows(2).any(|w| w[1] - w[0] <= st) {
        return None;
    }
    Some(axis)
}

/// Fill the map straight from regular sweeps, freeing each sweep once copied, so the peak
/// memory is about one copy of the data.
fn grid_regular(
    parts: FastParts,
    sweeps: Vec<RawSweep>,
    axis: Vec<f64>,
    swept_on_x: bool,
    opts: &GridOptions,
    points_read: usize,
) -> Result<Map> {
    let nch = parts.channels.len();
    let ncol = axis.len();
    let nrow = sweeps.len();
    let mut order: Vec<usize> = (0..nrow).collect();
    order.sort_by(|&a, &b| sweeps[a].step_value.total_cmp(&sweeps[b].step_value));
    let mut slots: Vec<Option<RawSweep>> = sweeps.into_iter().map(Some).collect();
    let mut values: Vec<Vec<f64>> = (0..nch).map(|_| Vec::with_capacity(nrow * ncol)).collect();
    let mut row_values = Vec::with_capacity(nrow);
    let mut row_dirs = Vec::with_capacity(nrow);
    let mut spans = Vec::with_capacity(nrow);
    let tol = {
        let mut d: Vec<f64> = axis.windows(2).map(|w| w[1] - w[0]).collect();
        1e-6 * median(&mut d)
    };
    for i in order {
        let s = slots[i].take().expect("each sweep is used once");
        let x = &s.swept;
        let up = x.len() == 1 || x[x.len() - 1] > x[0];
        let first = if up { x[0] } else { x[x.len() - 1] };
        let j0 = axis
            .iter()
            .position(|&a| (a - first).abs() <= tol)
            .unwrap_or(0);
        spans.push(x.len());
        for (c, out) in values.iter_mut().enumerate() {
            out.extend(std::iter::repeat_n(f64::NAN, j0));
            if up {
                out.extend_from_slice(&s.values[c]);
            } else {
                out.extend(s.values[c].iter().rev());
            }
            out.extend(std::iter::repeat_n(f64::NAN, ncol - j0 - x.len()));
        }
        row_values.push(s.step_value);
        row_dirs.push(s.direction);
    }
    let rows = RegularRows {
        axis,
        values,
        row_values,
        row_dirs,
        spans,
        points_read,
    };
    finish_regular(parts, rows, swept_on_x, opts)
}

/// Channel values already laid out row by row on the common axis.
struct RegularRows {
    axis: Vec<f64>,
    values: Vec<Vec<f64>>,
    row_values: Vec<f64>,
    row_dirs: Vec<SweepDirection>,
    spans: Vec<usize>,
    points_read: usize,
}

/// Glitch check, axes, channels and report for rows on an exact grid.
fn finish_regular(
    parts: FastParts,
    rows: RegularRows,
    swept_on_x: bool,
    opts: &GridOptions,
) -> Result<Map> {
    let RegularRows {
        axis,
        mut values,
        row_values,
        row_dirs,
        spans,
        points_read,
    } = rows;
    let nch = values.len();
    let ncol = axis.len();
    let nrow = row_values.len();
    debug_assert!(values.iter().all(|v| v.len() == nrow * ncol) && nch == parts.channels.len());
    let mut removed = Vec::new();
    for (c, v) in values.iter_mut().enumerate() {
        let found: Vec<(usize, Vec<usize>)> = v
            .par_chunks(ncol)
            .enumerate()
            .map(|(r, row)| (r, find_glitches(row)))
            .collect();
        for (r, cols) in found {
            for k in cols {
                removed.push((r, k, c, v[r * ncol + k]));
                if opts.remove_glitches {
                    v[r * ncol + k] = f64::NAN;
                }
            }
        }
    }
    let glitches = removed.len();
    if !opts.remove_glitches {
        removed.clear();
    }
    let step = {
        let mut d: Vec<f64> = axis.windows(2).map(|w| w[1] - w[0]).collect();
        median(&mut d)
    };
    let data: Vec<Array2<f64>> = values
        .into_iter()
        .map(|v| Array2::from_shape_vec((nrow, ncol), v).expect("rows × columns values"))
        .collect();
    let hysteresis = data
        .first()
        .and_then(|d| hysteresis_of_rows(d, &row_dirs, &row_values, step));
    let swept_axis = Axis::new(parts.swept_name, parts.swept_quantity, axis)?;
    let stepped_axis = Axis::new(parts.stepped_name, parts.stepped_quantity, row_values)?;
    let mut map = assemble_map(swept_axis, stepped_axis, parts.channels, data, swept_on_x)?;
    let median_span = median(&mut spans.iter().map(|&n| n as f64).collect::<Vec<_>>());
    let report = GridReport {
        sweeps: nrow,
        rows: nrow,
        columns: ncol,
        points_read,
        points_dropped: 0,
        duplicates_averaged: 0,
        rows_merged: 0,
        glitches,
        glitches_removed: opts.remove_glitches,
        short_sweeps: spans
            .iter()
            .filter(|&&n| (n as f64) < 0.8 * median_span)
            .count(),
        nan_cells: map.nan_counts(),
        step,
        exact: true,
        hysteresis,
        removed,
    };
    if swept_on_x {
        map.meta.row_directions = row_dirs;
    } else {
        map.meta.row_directions = vec![SweepDirection::Unknown; map.shape().0];
    }
    map.raw = RawPoints::GridIsExact;
    map.meta.gridding = Some(report);
    Ok(map)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A smooth stand-in for a measured channel, with features to align on.
    fn f(x: f64, y: f64) -> f64 {
        100.0 + 50.0 * (x / 0.3).sin() + 10.0 * y
    }

    fn sweep(y: f64, xs: Vec<f64>, dir: SweepDirection, shift: f64) -> RawSweep {
        let v = xs.iter().map(|&x| f(x - shift, y)).collect();
        RawSweep {
            step_value: y,
            direction: dir,
            first_line: 0,
            swept: xs,
            values: vec![v],
        }
    }

    fn set(sweeps: Vec<RawSweep>) -> SweepSet {
        SweepSet {
            context: "test".into(),
            swept_name: "vg".into(),
            swept_quantity: Quantity::Gate,
            stepped_name: "b".into(),
            stepped_quantity: Quantity::Field,
            channels: vec![("rxx".into(), ChannelKind::Rxx, String::new())],
            sweeps,
        }
    }

    /// Ragged sweeps with every flaw the gridding must handle.
    fn ragged(h: f64) -> (Vec<RawSweep>, Vec<f64>) {
        let mut rng = 12345u64;
        let mut jitter = || {
            rng = rng
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            ((rng >> 11) as f64 / (1u64 << 53) as f64 - 0.5) * 0.004
        };
        // Non-uniform field steps.
        let fields: Vec<f64> = (0..30)
            .map(|i| 0.02 * (i * i) as f64 + 0.1 * i as f64)
            .collect();
        let mut out = Vec::new();
        for (i, &y) in fields.iter().enumerate() {
            let up = i % 2 == 0;
            let mut xs: Vec<f64> = (0..=200)
                .map(|k| -5.0 + 0.05 * k as f64 + jitter())
                .collect();
            if i == 7 {
                xs.truncate(120); // aborted sweep
            }
            if !up {
                xs.reverse();
            }
            let dir = if up {
                SweepDirection::Up
            } else {
                SweepDirection::Down
            };
            let mut s = sweep(y, xs, dir, if up { 0.0 } else { h });
            if i == 11 {
                for k in 50..60 {
                    s.values[0][k] = f64::NAN; // NaN stretch
                }
            }
            if i == 14 {
                s.values[0][100] += 5000.0; // single-point glitch
            }
            if i == 3 {
                s.swept[10] = f64::NAN; // a point with no coordinate
            }
            out.push(s);
        }
        // A repeated field value: the last field measured again, upward.
        let y = fields[fields.len() - 1];
        let xs: Vec<f64> = (0..=200).map(|k| -5.0 + 0.05 * k as f64).collect();
        out.push(sweep(y, xs, SweepDirection::Up, 0.0));
        (out, fields)
    }

    #[test]
    fn ragged_sweeps_grid_without_inventing_data() {
        let (sweeps, fields) = ragged(0.0);
        let opts = GridOptions {
            remove_glitches: true,
            ..GridOptions::default()
        };
        let m = grid_sweeps(set(sweeps), true, &opts, DuplicatePolicy::Average).unwrap();
        let r = m.meta.gridding.clone().unwrap();
        assert_eq!(r.sweeps, 31);
        assert_eq!(r.rows, 30);
        assert_eq!(r.rows_merged, 1);
        assert_eq!(r.short_sweeps, 1);
        assert_eq!(r.glitches, 1);
        assert_eq!(r.points_dropped, 1);
        assert!(!r.exact);
        assert!((r.step - 0.05).abs() < 0.002, "step {}", r.step);
        // Field rows keep their measured (non-uniform) values.
        for (a, b) in m.y().values().iter().zip(&fields) {
            assert!((a - b).abs() < 1e-12);
        }
        let rxx = &m.channel("rxx").unwrap().data;
        let x = m.x().values();
        // Interpolated values match the smooth function (linear-interpolation error for a
        // 0.05 step and |f''| ≤ 50/0.09 is below 0.2).
        let mut checked = 0;
        for (row, &y) in m.y().values().iter().enumerate() {
            for (col, &xv) in x.iter().enumerate() {
                let v = rxx[[row, col]];
                if v.is_finite() {
                    assert!(
                        (v - f(xv, y)).abs() < 0.2,
                        "row {row} col {col}: {v} vs {}",
                        f(xv, y)
                    );
                    checked += 1;
                }
            }
        }
        assert!(checked > 5000);
        // Nothing past the aborted sweep's end.
        let last_x = -5.0 + 0.05 * 119.0;
        for (col, &xv) in x.iter().enumerate() {
            if xv > last_x + 0.01 {
                assert!(rxx[[7, col]].is_nan(), "extrapolated at {xv}");
            }
        }
        // The NaN stretch and the glitch stay NaN.
        assert!(rxx.row(11).iter().filter(|v| v.is_nan()).count() >= 9);
        assert!(rxx.row(14).iter().any(|v| v.is_nan()));
        assert!(matches!(m.raw, RawPoints::Sweeps { .. }));
        assert_eq!(m.meta.row_directions[0], SweepDirection::Up);
        assert_eq!(m.meta.row_directions[1], SweepDirection::Down);
    }

    #[test]
    fn hysteresis_between_up_and_down_sweeps_is_measured() {
        // Down sweeps see every feature 0.012 later (a few mV-like shift of 0.24 steps).
        let h = 0.012;
        let (sweeps, _) = ragged(h);
        let m = grid_sweeps(
            set(sweeps),
            true,
            &GridOptions::default(),
            DuplicatePolicy::Average,
        )
        .unwrap();
        let hy = m.meta.gridding.unwrap().hysteresis.unwrap();
        assert!(hy.pairs >= 20);
        assert!(
            (hy.shift - h).abs() < 0.25 * h,
            "estimated {} for {h}",
            hy.shift
        );
    }

    #[test]
    fn glitch_detector_spares_smooth_features() {
        let y: Vec<f64> = (0..400).map(|i| f(i as f64 * 0.01, 1.0)).collect();
        assert!(find_glitches(&y).is_empty());
        let mut z = y.clone();
        z[200] -= 80.0;
        assert_eq!(find_glitches(&z), vec![200]);
    }

    /// The glitch rule written out directly: sort the neighbourhood, take its median.
    fn glitches_by_sorting(y: &[f64]) -> Vec<usize> {
        let n = y.len();
        let res = |i: usize| y[i] - (-y[i - 2] + 4.0 * y[i - 1] + 4.0 * y[i + 1] - y[i + 2]) / 6.0;
        let r: Vec<f64> = (0..n)
            .map(|i| {
                if i < 2 || i + 2 >= n {
                    f64::NAN
                } else {
                    res(i).abs()
                }
            })
            .collect();
        let mut out = Vec::new();
        for i in 2..n.saturating_sub(2) {
            let ri = r[i];
            if !ri.is_finite() || (i - 2..=i + 2).any(|j| j != i && r[j] > ri) {
                continue;
            }
            let (a, b) = (y[i - 1], y[i + 1]);
            let excess = if res(i) > 0.0 {
                y[i] - a.max(b)
            } else {
                a.min(b) - y[i]
            };
            let mut w: Vec<f64> = (i.saturating_sub(20)..=(i + 20).min(n - 1))
                .filter(|&j| j.abs_diff(i) > 2 && r[j].is_finite())
                .map(|j| r[j])
                .collect();
            if w.len() < 8 {
                continue;
            }
            w.sort_by(f64::total_cmp);
            let sigma = 1.4826 * w[w.len() / 2];
            if sigma > 0.0
                && ri > 25.0 * sigma
                && excess > 2.0 * (b - a).abs()
                && excess > 25.0 * sigma
            {
                out.push(i);
            }
        }
        out
    }

    #[test]
    fn counted_median_rule_matches_the_sorted_median() {
        let mut seed = 11u64;
        let mut rnd = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        let mut found = 0;
        for trial in 0..300 {
            let n = 7 + (rnd() * 200.0) as usize;
            let mut y: Vec<f64> = (0..n)
                .map(|i| f(i as f64 * 0.02, 1.0) + 0.01 * (rnd() - 0.5))
                .collect();
            for _ in 0..(trial % 5) {
                let k = (rnd() * n as f64) as usize % n;
                y[k] += (rnd() - 0.5) * 40.0;
            }
            if trial % 7 == 0 {
                y[n / 2] = f64::NAN;
            }
            if trial % 11 == 0 {
                // Flat stretches: zero residuals, σ = 0 must never flag.
                for v in y.iter_mut().take(n / 2) {
                    *v = 1.0;
                }
            }
            let want = glitches_by_sorting(&y);
            found += want.len();
            assert_eq!(find_glitches(&y), want, "trial {trial}");
        }
        assert!(found > 50, "the trials must contain glitches ({found})");
    }

    #[test]
    fn regular_sweeps_take_the_exact_path() {
        let xs: Vec<f64> = (0..50).map(|k| k as f64 * 0.1).collect();
        let mut sweeps = Vec::new();
        for i in 0..6 {
            let mut x = xs.clone();
            let dir = if i % 2 == 0 {
                SweepDirection::Up
            } else {
                SweepDirection::Down
            };
            if i % 2 == 1 {
                x.reverse();
            }
            if i == 4 {
                x.truncate(30);
            }
            sweeps.push(sweep(i as f64, x, dir, 0.0));
        }
        let m = grid_sweeps(
            set(sweeps),
            true,
            &GridOptions::default(),
            DuplicatePolicy::Average,
        )
        .unwrap();
        let r = m.meta.gridding.as_ref().unwrap();
        assert!(r.exact);
        assert_eq!(r.short_sweeps, 1);
        let d = &m.channel("rxx").unwrap().data;
        for (col, &x) in xs.iter().enumerate() {
            assert_eq!(d[[1, col]], f(x, 1.0));
        }
        assert!(d[[4, 45]].is_nan());
        assert_eq!(d[[4, 29]], f(xs[29], 4.0));
    }
}

/// One sweep's place in a [`FlatSweeps`] store.
#[derive(Debug, Clone, PartialEq)]
pub struct SweepSpan {
    /// Index of the sweep's first point in the flat vectors.
    pub start: usize,
    /// Number of points.
    pub len: usize,
    /// Stepped coordinate during the sweep (SI).
    pub step_value: f64,
    /// Direction of the sweep.
    pub direction: SweepDirection,
    /// 1-based line of the file where the sweep starts.
    pub first_line: usize,
}

/// Sweeps stored as flat columns in measurement order (how loaders read them): one vector for
/// the swept coordinate, one per channel, and the span of each sweep.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct FlatSweeps {
    /// Swept coordinate of every point (SI).
    pub swept: Vec<f64>,
    /// Channel values of every point, one vector per channel (SI).
    pub values: Vec<Vec<f64>>,
    /// Where each sweep lies.
    pub spans: Vec<SweepSpan>,
}

impl FlatSweeps {
    /// The sweeps as separate [`RawSweep`]s (consumes the store).
    pub fn into_sweeps(self) -> Vec<RawSweep> {
        let FlatSweeps {
            swept,
            values,
            spans,
        } = self;
        spans
            .into_iter()
            .map(|sp| RawSweep {
                step_value: sp.step_value,
                direction: sp.direction,
                first_line: sp.first_line,
                swept: swept[sp.start..sp.start + sp.len].to_vec(),
                values: values
                    .iter()
                    .map(|v| v[sp.start..sp.start + sp.len].to_vec())
                    .collect(),
            })
            .collect()
    }

    /// If the store already is a full regular grid — every sweep the same strictly monotone
    /// points (to 10⁻⁶ of the step), stepped values strictly increasing in file order — the
    /// common axis.
    fn full_regular_axis(&self, step_tol: Option<f64>) -> Option<Vec<f64>> {
        let first = self.spans.first()?;
        let n = first.len;
        if n < 2 || self.spans.iter().any(|s| s.len != n) {
            return None;
        }
        let seg = |s: &SweepSpan| &self.swept[s.start..s.start + s.len];
        let mut axis = seg(first).to_vec();
        if axis[0] > axis[n - 1] {
            axis.reverse();
        }
        if axis.windows(2).any(|w| !(w[1] > w[0])) {
            return None;
        }
        let tol = 1e-6 * (axis[n - 1] - axis[0]) / (n - 1) as f64;
        let ok = self.spans.par_iter().all(|s| {
            let x = seg(s);
            let up = x[n - 1] > x[0];
            (0..n).all(|k| {
                let v = if up { x[k] } else { x[n - 1 - k] };
                (v - axis[k]).abs() <= tol
            }) && s.step_value.is_finite()
        });
        if !ok {
            return None;
        }
        let lo = self.spans[0].step_value;
        let hi = self.spans[self.spans.len() - 1].step_value;
        let st = step_tol.unwrap_or(1e-6 * (hi - lo).abs());
        self.spans
            .windows(2)
            .all(|w| w[1].step_value - w[0].step_value > st)
            .then_some(axis)
    }
}

/// Grid sweeps held in a [`FlatSweeps`] store. A file that is already a full regular grid in
/// field order is taken without copying the values; anything else goes through
/// [`grid_sweeps`].
pub fn grid_flat(
    set: SweepSet,
    flat: FlatSweeps,
    swept_on_x: bool,
    opts: &GridOptions,
    duplicates: DuplicatePolicy,
) -> Result<Map> {
    if opts.step.is_none() {
        if let Some(axis) = flat.full_regular_axis(opts.step_tolerance) {
            let FlatSweeps {
                swept,
                mut values,
                spans,
            } = flat;
            drop(swept);
            for sp in spans.iter().filter(|s| s.direction == SweepDirection::Down) {
                for v in &mut values {
                    v[sp.start..sp.start + sp.len].reverse();
                }
            }
            let parts = FastParts {
                swept_name: set.swept_name,
                swept_quantity: set.swept_quantity,
                stepped_name: set.stepped_name,
                stepped_quantity: set.stepped_quantity,
                channels: set.channels,
            };
            let rows = RegularRows {
                points_read: spans.iter().map(|s| s.len).sum(),
                spans: spans.iter().map(|s| s.len).collect(),
                row_values: spans.iter().map(|s| s.step_value).collect(),
                row_dirs: spans.iter().map(|s| s.direction).collect(),
                axis,
                values,
            };
            return finish_regular(parts, rows, swept_on_x, opts);
        }
    }
    let sweeps = flat.into_sweeps();
    grid_sweeps(SweepSet { sweeps, ..set }, swept_on_x, opts, duplicates)
}

/// A map from the two axes and the channels' arrays (rows along the stepped coordinate),
/// transposed when the swept coordinate belongs on y.
fn assemble_map(
    swept_axis: Axis,
    stepped_axis: Axis,
    channels: Vec<(String, ChannelKind, String)>,
    data: Vec<Array2<f64>>,
    swept_on_x: bool,
) -> Result<Map> {
    let (x, y) = if swept_on_x {
        (swept_axis, stepped_axis)
    } else {
        (stepped_axis, swept_axis)
    };
    let mut map = Map::new(x, y);
    for ((name, kind, unit), arr) in channels.into_iter().zip(data) {
        let arr = if swept_on_x {
            arr
        } else {
            arr.t().as_standard_layout().into_owned()
        };
        let mut c = Channel::new(name, kind, arr);
        if kind == ChannelKind::Other {
            c.unit = unit;
        }
        map.add_channel(c)?;
    }
    Ok(map)
}

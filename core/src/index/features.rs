//! Feature maps: the gap-strength map g on the map's grid, the R_xx minima along the gate axis
//! of every field row, the Hall plateau segments, and a k-d tree of the minima.
//!
//! Gap strength per field row: L = ln R_xx (floored at the noise level of R_xx near zero), a
//! smooth upper background of L from a wide running quantile, and
//! g = (background − L)/σ_row, where σ_row is the noise of the second-difference residual
//! of L read from a low quantile of its sizes (robust where minima fill most of a row). g is
//! dimensionless (standard deviations of the row noise): large where R_xx has a deep minimum, ≈ 0 on the background, and the huge dynamic range of
//! R_xx (from mΩ in a gap to kΩ between) is compressed by the logarithm. Where R_xy exists, the
//! same is done with ln σ_xx and the larger of the two strengths is kept: every gap is a σ_xx
//! minimum, while an insulating gap with σ_xy = 0 (ν = 0) is an R_xx maximum.

use crate::conductivity::sigma_from_rho;
use crate::constants::E2_OVER_H;
use crate::error::{Error, Result};
use crate::map::{ChannelKind, Map, Quantity};
use kdtree::distance::squared_euclidean;
use kdtree::KdTree;
use ndarray::{Array2, Axis as NdAxis};
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Options of the gap-strength map.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GapMapOptions {
    /// Width of the running background window as a fraction of the row length.
    pub background_fraction: f64,
    /// Quantile of L taken as the background (0.5 = median; higher follows the upper envelope,
    /// which stays on the background where gaps fill much of a row).
    pub background_quantile: f64,
    /// Smallest row noise in units of ln R (relative noise), so noiseless data stays finite.
    pub min_row_noise: f64,
    /// Largest |g| kept (g is clipped to ±this).
    pub clip: f64,
    /// Quantile of |second difference| of ln R along a row from which the row noise is read
    /// (see [`low_quantile_sigma`]); small, so that signal in most of the row does not count
    /// as noise.
    pub noise_quantile: f64,
}

impl Default for GapMapOptions {
    fn default() -> Self {
        GapMapOptions {
            background_fraction: 0.12,
            background_quantile: 0.75,
            min_row_noise: 1e-3,
            clip: 200.0,
            noise_quantile: 0.2,
        }
    }
}

/// The gap-strength map and what it was built from.
#[derive(Debug, Clone, PartialEq)]
pub struct GapMap {
    /// g on the map grid (rows = field, columns = gate), in row-noise units; NaN where R_xx was
    /// not measured.
    pub g: Array2<f64>,
    /// Robust noise σ_row of ln R_xx per row (relative noise, dimensionless).
    pub row_noise: Vec<f64>,
    /// Floor applied to R_xx before the logarithm, Ω.
    pub floor_ohm: f64,
    /// True when ln σ_xx (from R_xx and R_xy) was combined in.
    pub used_sigma_xx: bool,
    /// Fraction of R_xy found mixed into R_xx and subtracted before the logarithm.
    pub misalignment: f64,
    /// With σ_xx combined in, the strength of ln R_xx alone (`g` is the larger of it and σ_xx's),
    /// same grid and units: an R_xx dip beside a broad σ_xx feature (a fractional state next to
    /// the ν = 0 insulator, whose σ_xx trough is wide) makes no ridge in `g` but does here.
    pub rxx_alone: Option<Array2<f64>>,
}

/// The `q`-quantile (0…1, linear between neighbouring order statistics) of finite `v`, found
/// by selection in O(len) instead of sorting; `v` is reordered. NaN when empty.
fn quantile_select(v: &mut [f64], q: f64) -> f64 {
    if v.is_empty() {
        return f64::NAN;
    }
    let pos = q.clamp(0.0, 1.0) * (v.len() - 1) as f64;
    let i = pos.floor() as usize;
    let f = pos - i as f64;
    let (_, &mut lo, right) = v.select_nth_unstable_by(i, f64::total_cmp);
    if f > 0.0 && !right.is_empty() {
        // The next order statistic is the smallest of the part above the i-th.
        let hi = right.iter().copied().fold(f64::INFINITY, f64::min);
        lo * (1.0 - f) + hi * f
    } else {
        lo
    }
}

/// Median of the finite values (NaN when none).
pub(crate) fn median(values: impl IntoIterator<Item = f64>) -> f64 {
    let mut v: Vec<f64> = values.into_iter().filter(|x| x.is_finite()).collect();
    quantile_select(&mut v, 0.5)
}

/// Robust standard deviation 1.4826·MAD of the finite values (NaN when none).
pub(crate) fn robust_sigma(values: impl IntoIterator<Item = f64>) -> f64 {
    let mut v: Vec<f64> = values.into_iter().filter(|x| x.is_finite()).collect();
    let m = quantile_select(&mut v, 0.5);
    v.iter_mut().for_each(|x| *x = (*x - m).abs());
    1.4826 * quantile_select(&mut v, 0.5)
}

/// σ of zero-mean normal noise from the `q`-quantile of |x| (q small: robust to a large
/// fraction of points carrying signal, which only ever widen |x|). NaN without finite values.
pub fn low_quantile_sigma(values: impl IntoIterator<Item = f64>, q: f64) -> f64 {
    let mut v: Vec<f64> = values
        .into_iter()
        .filter(|x| x.is_finite())
        .map(f64::abs)
        .collect();
    if v.is_empty() {
        return f64::NAN;
    }
    // |X| for X ~ N(0, σ²): P(|X| ≤ zσ) = q with z = Φ⁻¹((1 + q)/2).
    let z = inverse_normal_cdf(0.5 * (1.0 + q));
    quantile_select(&mut v, q) / z
}

/// Φ⁻¹(p) for 0 < p < 1 (Acklam's rational approximation, relative error < 1.2·10⁻⁹).
fn inverse_normal_cdf(p: f64) -> f64 {
    const A: [f64; 6] = [
        -3.969683028665376e1,
        2.209460984245205e2,
        -2.759285104469687e2,
        1.38357751867269e2,
        -3.066479806614716e1,
        2.506628277459239,
    ];
    const B: [f64; 5] = [
        -5.447609879822406e1,
        1.615858368580409e2,
        -1.556989798598866e2,
        6.680131188771972e1,
        -1.328068155288572e1,
    ];
    const C: [f64; 6] = [
        -7.784894002430293e-3,
        -3.223964580411365e-1,
        -2.400758277161838,
        -2.549732539343734,
        4.374664141464968,
        2.938163982698783,
    ];
    const D: [f64; 4] = [
        7.784695709041462e-3,
        3.224671290700398e-1,
        2.445134137142996,
        3.754408661907416,
    ];
    let pl = 0.02425;
    if p < pl {
        let q = (-2.0 * p.ln()).sqrt();
        (((((C[0] * q + C[1]) * q + C[2]) * q + C[3]) * q + C[4]) * q + C[5])
            / ((((D[0] * q + D[1]) * q + D[2]) * q + D[3]) * q + 1.0)
    } else if p <= 1.0 - pl {
        let q = p - 0.5;
        let r = q * q;
        (((((A[0] * r + A[1]) * r + A[2]) * r + A[3]) * r + A[4]) * r + A[5]) * q
            / (((((B[0] * r + B[1]) * r + B[2]) * r + B[3]) * r + B[4]) * r + 1.0)
    } else {
        -inverse_normal_cdf(1.0 - p)
    }
}

/// Running `q`-quantile of `row` over a window of `w` points, evaluated every `w/4` points and
/// interpolated linearly in between (NaN entries are skipped).
fn running_quantile(row: &[f64], w: usize, q: f64) -> Vec<f64> {
    let n = row.len();
    let hop = (w / 4).max(1);
    let half = w / 2;
    let mut knots: Vec<(usize, f64)> = Vec::new();
    let mut buf = Vec::with_capacity(w + 1);
    let mut c: usize = 0;
    loop {
        let lo = c.saturating_sub(half);
        let hi = (c + half + 1).min(n);
        buf.clear();
        buf.extend(row[lo..hi].iter().copied().filter(|x| x.is_finite()));
        if !buf.is_empty() {
            knots.push((c, quantile_select(&mut buf, q)));
        }
        if c + 1 >= n {
            break;
        }
        c = (c + hop).min(n - 1);
    }
    let mut out = vec![f64::NAN; n];
    if knots.is_empty() {
        return out;
    }
    for (j, o) in out.iter_mut().enumerate() {
        let k = knots.partition_point(|&(c, _)| c <= j);
        *o = if k == 0 {
            knots[0].1
        } else if k == knots.len() {
            knots[k - 1].1
        } else {
            let (c0, v0) = knots[k - 1];
            let (c1, v1) = knots[k];
            v0 + (v1 - v0) * (j - c0) as f64 / (c1 - c0) as f64
        };
    }
    out
}

/// g of one row of L (ln of a positive quantity that dips in a gap).
fn strength_row(l: &[f64], opts: &GapMapOptions) -> (Vec<f64>, f64) {
    let n = l.len();
    let w = ((opts.background_fraction * n as f64) as usize).max(9);
    let bg = running_quantile(l, w, opts.background_quantile);
    let resid = (1..n.saturating_sub(1)).map(|i| l[i] - 0.5 * (l[i - 1] + l[i + 1]));
    // Second differences of white noise have σ·√(3/2). The gaps' sharp minima and the dense
    // low-field oscillations fill much of a row with large second differences, so the noise
    // is read from a low quantile of their sizes, not from their median.
    let sigma =
        (low_quantile_sigma(resid, opts.noise_quantile) / 1.5f64.sqrt()).max(opts.min_row_noise);
    let sigma = if sigma.is_finite() {
        sigma
    } else {
        opts.min_row_noise
    };
    let g = (0..n)
        .map(|i| ((bg[i] - l[i]) / sigma).clamp(-opts.clip, opts.clip))
        .collect();
    (g, sigma)
}

/// Noise floor of R_xx near zero (Ω): the robust scatter of second differences among the 10 %
/// smallest |R_xx|, times 3; at least 10⁻⁹ of the largest |R_xx|.
fn rxx_floor(rxx: &Array2<f64>) -> f64 {
    let mut abs: Vec<f64> = rxx
        .iter()
        .filter(|v| v.is_finite())
        .map(|v| v.abs())
        .collect();
    if abs.is_empty() {
        return 1e-9;
    }
    let max = abs.iter().copied().fold(0.0, f64::max);
    let typical = quantile_select(&mut abs, 0.5);
    let cut = quantile_select(&mut abs, 0.1);
    let mut diffs = Vec::new();
    for row in rxx.axis_iter(NdAxis(0)) {
        let r = row
            .as_slice()
            .map(|s| s.to_vec())
            .unwrap_or_else(|| row.to_vec());
        for i in 1..r.len().saturating_sub(1) {
            if r[i].abs() <= cut && r[i - 1].abs() <= cut && r[i + 1].abs() <= cut {
                diffs.push(r[i] - 0.5 * (r[i - 1] + r[i + 1]));
            }
        }
    }
    let s = robust_sigma(diffs) / 1.5f64.sqrt();
    let floor = 3.0 * if s.is_finite() { s } else { 0.0 };
    floor.max(5e-3 * typical).max(1e-9 * max).max(1e-12)
}

/// Inside a run of floored points (a gap deeper than the noise) g is set to its largest value
/// over the run, so the run is one flat-topped feature whose centre is the gap's centre.
fn flatten_floored_runs(g: &mut [f64], l: &[f64], ln_floor: f64) {
    let n = g.len();
    let mut j = 0;
    while j < n {
        if l[j] == ln_floor {
            let mut k = j;
            while k + 1 < n && l[k + 1] == ln_floor {
                k += 1;
            }
            let m = g[j..=k].iter().copied().fold(f64::NEG_INFINITY, f64::max);
            g[j..=k].iter_mut().for_each(|v| *v = m);
            j = k + 1;
        } else {
            j += 1;
        }
    }
}

/// Fraction f of R_xy mixed into R_xx by misaligned contacts, R_xx,measured = R_xx + f·R_xy,
/// estimated from the Hall plateaus: where R_xy is flat and large the true R_xx vanishes, so the
/// ratio R_xx/R_xy clusters at f. Returns 0 when there is too little plateau to tell.
pub fn misalignment_fraction(rxx: &Array2<f64>, rxy: &Array2<f64>) -> f64 {
    let (rows, cols) = rxx.dim();
    let typical = median(rxy.iter().map(|v| v.abs()));
    if !(typical > 0.0) {
        return 0.0;
    }
    let mut ratios = Vec::new();
    for i in 0..rows {
        for j in 1..cols.saturating_sub(1) {
            let (a, b, c) = (rxy[[i, j - 1]], rxy[[i, j]], rxy[[i, j + 1]]);
            let r = rxx[[i, j]];
            if !(a.is_finite() && b.is_finite() && c.is_finite() && r.is_finite()) {
                continue;
            }
            let flat = (a - b).abs() < 0.005 * b.abs() && (c - b).abs() < 0.005 * b.abs();
            if flat && b.abs() > 0.2 * typical {
                let q = r / b;
                if q.abs() < 0.05 {
                    ratios.push(q);
                }
            }
        }
    }
    if ratios.len() < 20 {
        return 0.0;
    }
    // Mode of the ratios: densest window of width 0.001.
    ratios.sort_by(f64::total_cmp);
    let w = 1e-3;
    let (mut best_at, mut best_n, mut k) = ((0usize, 0usize), 0usize, 0usize);
    for i in 0..ratios.len() {
        while ratios[i] - ratios[k] > w {
            k += 1;
        }
        if i + 1 - k > best_n {
            best_n = i + 1 - k;
            best_at = (k, i);
        }
    }
    if best_n * 20 < ratios.len() {
        0.0
    } else {
        // The window is sorted: its median is its middle element(s).
        let (a, z) = best_at;
        0.5 * (ratios[a + (z - a) / 2] + ratios[a + (z - a).div_ceil(2)])
    }
}

/// Check the map has a gate-like x axis and a field y axis.
pub(crate) fn check_axes(map: &Map) -> Result<()> {
    if map.y().quantity != Quantity::Field {
        return Err(Error::MapRequirement(format!(
            "indexing needs the magnetic field on the row axis; the rows are `{}` ({:?})",
            map.y().name,
            map.y().quantity
        )));
    }
    if !matches!(
        map.x().quantity,
        Quantity::Gate | Quantity::BottomGate | Quantity::TopGate
    ) {
        return Err(Error::MapRequirement(format!(
            "indexing needs a single gate voltage on the column axis; the columns are `{}` ({:?})",
            map.x().name,
            map.x().quantity
        )));
    }
    let (rows, cols) = map.shape();
    if rows < 3 || cols < 16 {
        return Err(Error::MapRequirement(format!(
            "indexing needs at least 3 field rows and 16 gate points; the map has {rows} × {cols}"
        )));
    }
    Ok(())
}

/// Build the gap-strength map of `map` (needs an R_xx channel; uses R_xy when present).
pub fn gap_map(map: &Map, opts: &GapMapOptions) -> Result<GapMap> {
    check_axes(map)?;
    let raw = &map.require(ChannelKind::Rxx)?.data;
    let rxy = map.channel_of(ChannelKind::Rxy).map(|c| &c.data);
    let mix = rxy.map_or(0.0, |xy| misalignment_fraction(raw, xy));
    let corrected;
    let rxx = match rxy {
        Some(xy) if mix != 0.0 => {
            corrected = ndarray::Zip::from(raw)
                .and(xy)
                .map_collect(|&r, &h| r - mix * h);
            &corrected
        }
        _ => raw,
    };
    let floor = rxx_floor(rxx);
    let (rows, cols) = map.shape();
    let mut g = Array2::from_elem((rows, cols), f64::NAN);
    let mut noise = vec![0.0; rows];
    let mut of_rxx = Array2::from_elem((rows, cols), f64::NAN);
    g.axis_iter_mut(NdAxis(0))
        .into_par_iter()
        .zip(of_rxx.axis_iter_mut(NdAxis(0)))
        .zip(noise.par_iter_mut())
        .enumerate()
        .for_each(|(i, ((mut grow, mut rrow), nz))| {
            let lr: Vec<f64> = (0..cols)
                .map(|j| {
                    let r = rxx[[i, j]];
                    if r.is_finite() {
                        r.max(floor).ln()
                    } else {
                        f64::NAN
                    }
                })
                .collect();
            let (gr, sr) = strength_row(&lr, opts);
            *nz = sr;
            let combined: Vec<f64> = match rxy {
                Some(xy) => {
                    let ls: Vec<f64> = (0..cols)
                        .map(|j| {
                            let (r, h) = (rxx[[i, j]], xy[[i, j]]);
                            if r.is_finite() && h.is_finite() {
                                let (sxx, _) = sigma_from_rho(r.max(floor), h);
                                (sxx / E2_OVER_H).max(1e-300).ln()
                            } else {
                                f64::NAN
                            }
                        })
                        .collect();
                    let (gs, _) = strength_row(&ls, opts);
                    let both = gr
                        .iter()
                        .zip(&gs)
                        .map(|(a, b)| if b.is_finite() { a.max(*b) } else { *a })
                        .collect();
                    let mut alone = gr;
                    flatten_floored_runs(&mut alone, &lr, floor.ln());
                    for (j, v) in alone.into_iter().enumerate() {
                        rrow[j] = if lr[j].is_finite() { v } else { f64::NAN };
                    }
                    both
                }
                None => gr,
            };
            let mut combined = combined;
            flatten_floored_runs(&mut combined, &lr, floor.ln());
            for (j, v) in combined.into_iter().enumerate() {
                grow[j] = if lr[j].is_finite() { v } else { f64::NAN };
            }
        });
    Ok(GapMap {
        g,
        row_noise: noise,
        floor_ohm: floor,
        used_sigma_xx: rxy.is_some(),
        misalignment: mix,
        rxx_alone: rxy.is_some().then_some(of_rxx),
    })
}

/// A local minimum of R_xx along the gate axis in one field row.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MinimumPoint {
    /// Row index (field).
    pub row: usize,
    /// Fractional column index of the minimum (centre of a flat bottom).
    pub col: f64,
    /// Gate voltage of the minimum, V.
    pub gate_v: f64,
    /// Field of the row, T.
    pub field_t: f64,
    /// Gap strength g at the minimum (row-noise units).
    pub strength: f64,
    /// Prominence in g units: height above the higher of the two bases.
    pub prominence: f64,
    /// Full width at half prominence along the gate axis, V.
    pub width_v: f64,
}

/// Local maxima of g along each row with prominence ≥ `min_prominence` (row-noise units).
pub fn find_minima(map: &Map, gap: &GapMap, min_prominence: f64) -> Vec<MinimumPoint> {
    let x = map.x();
    let y = map.y().values();
    let (rows, cols) = gap.g.dim();
    let step = (x.max() - x.min()) / (cols.max(2) - 1) as f64;
    (0..rows)
        .into_par_iter()
        .flat_map_iter(|i| {
            let row: Vec<f64> = gap.g.row(i).iter().copied().collect();
            let mut out = Vec::new();
            let mut j = 1;
            while j + 1 < cols {
                let v = row[j];
                if !v.is_finite() || !(v > row[j - 1]) {
                    j += 1;
                    continue;
                }
                // Flat tops: extend while equal.
                let mut k = j;
                while k + 1 < cols && row[k + 1] == v {
                    k += 1;
                }
                if k + 1 >= cols || !(v > row[k + 1]) {
                    j = k + 1;
                    continue;
                }
                // Bases: lowest value before a higher point on each side.
                let mut lb = v;
                let mut a = j;
                while a > 0 {
                    a -= 1;
                    let u = row[a];
                    if !u.is_finite() || u > v {
                        break;
                    }
                    lb = lb.min(u);
                }
                let mut rb = v;
                let mut b = k;
                while b + 1 < cols {
                    b += 1;
                    let u = row[b];
                    if !u.is_finite() || u > v {
                        break;
                    }
                    rb = rb.min(u);
                }
                let prom = v - lb.max(rb);
                if prom >= min_prominence {
                    let half = v - 0.5 * prom;
                    let mut l = j as f64;
                    let mut p = j;
                    while p > 0 && row[p - 1].is_finite() && row[p - 1] > half {
                        p -= 1;
                    }
                    if p > 0 && row[p - 1].is_finite() {
                        l = p as f64 - (row[p] - half) / (row[p] - row[p - 1]);
                    } else if p == 0 {
                        l = 0.0;
                    }
                    let mut r = k as f64;
                    let mut q = k;
                    while q + 1 < cols && row[q + 1].is_finite() && row[q + 1] > half {
                        q += 1;
                    }
                    if q + 1 < cols && row[q + 1].is_finite() {
                        r = q as f64 + (row[q] - half) / (row[q] - row[q + 1]);
                    }
                    let c = 0.5 * (j + k) as f64;
                    out.push(MinimumPoint {
                        row: i,
                        col: c,
                        gate_v: x.value_at(c).unwrap_or(f64::NAN),
                        field_t: y[i],
                        strength: v,
                        prominence: prom,
                        width_v: ((r - l).max(1.0)) * step,
                    });
                }
                j = k + 1;
            }
            out.into_iter()
        })
        .collect()
}

/// A Hall plateau segment along the gate axis in one field row.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct PlateauSegment {
    /// Row index.
    pub row: usize,
    /// Field, T.
    pub field_t: f64,
    /// First and last gate voltage of the flat run, V.
    pub gate_range_v: (f64, f64),
    /// Median Hall conductivity over the run in e²/h, with the map's sign convention
    /// σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²).
    pub sigma_xy_e2h: f64,
}

/// Hall conductivity σ_xy in e²/h on the map grid (R_xx taken as ρ_xx: one square), or None
/// without R_xy.
pub fn sigma_xy_e2h(map: &Map) -> Option<Array2<f64>> {
    let rxx = &map.channel_of(ChannelKind::Rxx)?.data;
    let rxy = &map.channel_of(ChannelKind::Rxy)?.data;
    Some(ndarray::Zip::from(rxx).and(rxy).map_collect(|&r, &h| {
        let (_, sxy) = sigma_from_rho(r, h);
        sxy / E2_OVER_H
    }))
}

/// Runs of at least `min_len` gate points along which σ_xy changes by less than `tol` e²/h per
/// point (a Hall plateau, where |dσ_xy/dn| is small).
pub fn find_plateaus(
    map: &Map,
    sxy: &Array2<f64>,
    tol: f64,
    min_len: usize,
) -> Vec<PlateauSegment> {
    let x = map.x().values();
    let y = map.y().values();
    let (rows, cols) = sxy.dim();
    (0..rows)
        .into_par_iter()
        .flat_map_iter(|i| {
            let row: Vec<f64> = sxy.row(i).iter().copied().collect();
            let mut out = Vec::new();
            let mut start = 0;
            for j in 1..=cols {
                let flat = j < cols
                    && row[j].is_finite()
                    && row[j - 1].is_finite()
                    && (row[j] - row[j - 1]).abs() < tol;
                if !flat {
                    if j - start >= min_len {
                        out.push(PlateauSegment {
                            row: i,
                            field_t: y[i],
                            gate_range_v: (x[start], x[j - 1]),
                            sigma_xy_e2h: median(row[start..j].iter().copied()),
                        });
                    }
                    start = j;
                }
            }
            out.into_iter()
        })
        .collect()
}

/// A k-d tree over feature points in normalised (gate, field) coordinates, for nearest-feature
/// queries (snapping).
pub struct FeatureIndex {
    tree: KdTree<f64, usize, [f64; 2]>,
    scale: (f64, f64),
    points: Vec<MinimumPoint>,
}

impl std::fmt::Debug for FeatureIndex {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "FeatureIndex({} points)", self.points.len())
    }
}

impl FeatureIndex {
    /// Index `points`; distances are measured with the gate axis divided by `gate_span_v` and
    /// the field by `field_span_t` (both > 0). Points with non-finite coordinates are skipped.
    pub fn new(points: Vec<MinimumPoint>, gate_span_v: f64, field_span_t: f64) -> Result<Self> {
        if !(gate_span_v > 0.0 && field_span_t > 0.0) {
            return Err(Error::invalid(
                "feature index scale",
                format!("spans {gate_span_v} V, {field_span_t} T: expected positive spans"),
            ));
        }
        let points: Vec<MinimumPoint> = points
            .into_iter()
            .filter(|p| p.gate_v.is_finite() && p.field_t.is_finite())
            .collect();
        let mut tree = KdTree::with_capacity(2, 64);
        for (k, p) in points.iter().enumerate() {
            tree.add([p.gate_v / gate_span_v, p.field_t / field_span_t], k)
                .map_err(|e| Error::invalid("feature point", format!("{e:?}")))?;
        }
        Ok(FeatureIndex {
            tree,
            scale: (gate_span_v, field_span_t),
            points,
        })
    }

    /// The indexed points.
    pub fn points(&self) -> &[MinimumPoint] {
        &self.points
    }

    /// Up to `k` nearest points to (gate V, field T), nearest first, with their normalised
    /// distance. Errors on a non-finite query.
    pub fn nearest(
        &self,
        gate_v: f64,
        field_t: f64,
        k: usize,
    ) -> Result<Vec<(f64, &MinimumPoint)>> {
        if !(gate_v.is_finite() && field_t.is_finite()) {
            return Err(Error::invalid(
                "nearest-feature query",
                format!("({gate_v} V, {field_t} T): expected finite coordinates"),
            ));
        }
        if self.points.is_empty() {
            return Ok(Vec::new());
        }
        let q = [gate_v / self.scale.0, field_t / self.scale.1];
        let found = self
            .tree
            .nearest(&q, k, &squared_euclidean)
            .map_err(|e| Error::invalid("nearest-feature query", format!("{e:?}")))?;
        Ok(found
            .into_iter()
            .map(|(d2, &i)| (d2.sqrt(), &self.points[i]))
            .collect())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Linear-interpolated quantile of sorted values (the textbook definition the selection
    /// must reproduce).
    fn sorted_quantile(v: &[f64], q: f64) -> f64 {
        let mut s = v.to_vec();
        s.sort_by(f64::total_cmp);
        let pos = q * (s.len() - 1) as f64;
        let i = pos.floor() as usize;
        let f = pos - i as f64;
        if i + 1 < s.len() {
            s[i] * (1.0 - f) + s[i + 1] * f
        } else {
            s[i]
        }
    }

    #[test]
    fn inverse_normal_cdf_matches_table_values() {
        // Standard normal quantiles (any statistics table): Φ⁻¹(0.975) = 1.959964,
        // Φ⁻¹(0.6) = 0.253347, Φ⁻¹(0.001) = −3.090232.
        for (p, z) in [
            (0.975, 1.959964),
            (0.6, 0.253347),
            (0.001, -3.090232),
            (0.5, 0.0),
        ] {
            assert!((inverse_normal_cdf(p) - z).abs() < 2e-6, "Φ⁻¹({p})");
        }
    }

    #[test]
    fn row_noise_is_read_past_dense_sharp_minima() {
        // A row of ln R with white noise σ = 0.01 (Box–Muller from a fixed xorshift) and a sharp
        // minimum every 5 points (a dense low-field fan: 60 % of the second differences carry
        // signal): the median of |second difference| is set by the minima, the 0.2-quantile by
        // the noise, biased up by the share of signal: it is the 0.5-quantile of the noise's
        // |x|, 2.66× the unbiased one (Φ⁻¹(0.75)/Φ⁻¹(0.6) = 0.674/0.253).
        let n = 4000;
        let mut s = 0x9e3779b97f4a7c15u64;
        let mut u = || {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            (s >> 11) as f64 / (1u64 << 53) as f64
        };
        let sigma = 0.01;
        let l: Vec<f64> = (0..n)
            .map(|j| {
                let z = (-2.0 * u().max(1e-300).ln()).sqrt() * (std::f64::consts::TAU * u()).cos();
                let dip = if j % 5 == 0 { -2.0 } else { 0.0 };
                6.0 + dip + sigma * z
            })
            .collect();
        let (_, est) = strength_row(&l, &GapMapOptions::default());
        assert!(
            est > 2.3 * sigma && est < 3.0 * sigma,
            "estimated {est}, true {sigma}"
        );
        // The median-based estimate of the same row is dominated by the minima.
        let resid = (1..n - 1).map(|i| l[i] - 0.5 * (l[i - 1] + l[i + 1]));
        assert!(robust_sigma(resid) / 1.5f64.sqrt() > 20.0 * sigma);
    }

    #[test]
    fn selected_quantiles_equal_sorted_ones() {
        // A scrambled sequence with repeats: x_k = (37 k mod 101) / 7, k = 0..250.
        let v: Vec<f64> = (0..250).map(|k| ((37 * k) % 101) as f64 / 7.0).collect();
        for q in [0.0, 0.1, 0.25, 0.5, 0.75, 0.9, 1.0] {
            for len in [1, 2, 3, 10, 57, 250] {
                let mut w = v[..len].to_vec();
                let want = sorted_quantile(&v[..len], q);
                let got = quantile_select(&mut w, q);
                assert!(
                    (got - want).abs() < 1e-12,
                    "q {q} len {len}: {got} vs {want}"
                );
            }
        }
        assert!(quantile_select(&mut [], 0.5).is_nan());
        // Median and MAD of 1..=9: 5 and 2 (|x − 5| = 0,1,1,2,2,3,3,4,4).
        let m: Vec<f64> = (1..=9).map(|k| k as f64).collect();
        assert_eq!(median(m.iter().copied()), 5.0);
        assert!((robust_sigma(m.iter().copied()) - 1.4826 * 2.0).abs() < 1e-12);
        assert!(median([f64::NAN, 3.0, 1.0]) == 2.0);
    }
}

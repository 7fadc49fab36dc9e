//! Gate calibration from the data, three independent ways, and the moiré density.
//!
//! (a) Low-field Hall slope: R_xy = R_H·B with R_H = 1/(n e) per gate column over the
//!     classical field range, then n = α(V_g − V_CNP) fitted over the longest linear segment
//!     through charge neutrality.
//! (b) Quantum Hall states: lines of constant ν pass through (V_CNP, B = 0) with
//!     V = V_CNP + ν(e/h)B/α. The V_CNP that makes the histogram of slopes (V − V_CNP)/B of
//!     strong minima sharpest is taken, its peaks are mapped onto the stack's degenerate
//!     sequence (matched peaks score, unmatched peaks and missing members cost), and V against
//!     ν(e/h)B is fitted by least squares over every assigned minimum.
//! (c) Geometry: α = ε₀ε_r/(e d) of the gate dielectric.
//! The moiré density n₀ comes from a one-dimensional search scoring how many strong minima lie
//! on the satellite fans and band insulators at s = ±4, refined by least squares.

use super::features::{median, MinimumPoint};
use super::stack::Stack;
use crate::constants::{ELEMENTARY_CHARGE, E_OVER_H};
use crate::error::{Error, Result};
use crate::gate::{Dielectric, SingleGate};
use crate::map::{ChannelKind, Map};
use serde::{Deserialize, Serialize};

/// How a gate calibration was obtained.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CalibrationMethod {
    /// Low-field Hall slope.
    HallSlope,
    /// Fit of the quantum Hall states' fan.
    QuantumHall,
    /// Dielectric thickness and permittivity.
    Geometry,
    /// Given by the user.
    Given,
}

impl CalibrationMethod {
    /// Words for messages.
    pub fn name(self) -> &'static str {
        match self {
            CalibrationMethod::HallSlope => "Hall-slope",
            CalibrationMethod::QuantumHall => "quantum Hall",
            CalibrationMethod::Geometry => "geometric",
            CalibrationMethod::Given => "given",
        }
    }
}

/// One gate calibration with standard uncertainties.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GateEstimate {
    /// Lever arm α, cm⁻² V⁻¹.
    #[serde(rename = "alpha_cm2_per_V")]
    pub alpha_cm2_per_v: f64,
    /// Standard uncertainty of α, cm⁻² V⁻¹.
    #[serde(rename = "alpha_sigma_cm2_per_V")]
    pub alpha_sigma_cm2_per_v: f64,
    /// Charge-neutrality gate voltage, V (null for geometry alone).
    #[serde(rename = "v_cnp_V")]
    pub v_cnp_v: Option<f64>,
    /// Standard uncertainty of V_CNP, V.
    #[serde(rename = "v_cnp_sigma_V")]
    pub v_cnp_sigma_v: Option<f64>,
    /// How it was obtained.
    pub method: CalibrationMethod,
    /// Points (columns or minima) that entered the fit.
    pub points: usize,
}

impl GateEstimate {
    /// The gate model (α in m⁻²/V); V_CNP defaults to `fallback_v_cnp` when the estimate has
    /// none.
    pub fn gate(&self, fallback_v_cnp: f64) -> SingleGate {
        SingleGate {
            alpha_m2_per_v: self.alpha_cm2_per_v * 1e4,
            v_cnp: self.v_cnp_v.unwrap_or(fallback_v_cnp),
        }
    }
}

/// Moiré superlattice parameters found in the data.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct MoireEstimate {
    /// n₀ = 1/A, cm⁻².
    pub n0_cm2: f64,
    /// Standard uncertainty of n₀, cm⁻².
    pub n0_sigma_cm2: f64,
    /// Full filling n_s = 4n₀, cm⁻².
    pub n_s_cm2: f64,
    /// Moiré wavelength λ (A = (√3/2)λ²), nm.
    pub lambda_nm: f64,
    /// Twist angle to hBN for the lattice mismatch used (null if n₀ is beyond the aligned
    /// maximum), degrees.
    pub twist_deg: Option<f64>,
    /// Minima on the s = ±4 lines that entered the fit.
    pub points: usize,
}

/// The chosen calibration and every method tried.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Calibration {
    /// Lever arm α, cm⁻² V⁻¹.
    #[serde(rename = "alpha_cm2_per_V")]
    pub alpha_cm2_per_v: f64,
    /// Its standard uncertainty.
    #[serde(rename = "alpha_sigma_cm2_per_V")]
    pub alpha_sigma_cm2_per_v: f64,
    /// V_CNP, V.
    #[serde(rename = "v_cnp_V")]
    pub v_cnp_v: f64,
    /// Its standard uncertainty, V.
    #[serde(rename = "v_cnp_sigma_V")]
    pub v_cnp_sigma_v: f64,
    /// Method of the chosen values.
    pub method: CalibrationMethod,
    /// Every estimate, side by side.
    pub methods: Vec<GateEstimate>,
    /// Notes: disagreements, ambiguities resolved.
    pub notes: Vec<String>,
}

impl Calibration {
    /// The gate model n = α(V − V_CNP) (α in m⁻²/V).
    pub fn gate(&self) -> SingleGate {
        SingleGate {
            alpha_m2_per_v: self.alpha_cm2_per_v * 1e4,
            v_cnp: self.v_cnp_v,
        }
    }
}

/// Straight-line least squares y = a + b x with weights; returns (a, b, cov[[aa, ab],[ab, bb]],
/// reduced χ²) with the covariance scaled by the scatter.
fn wls(x: &[f64], y: &[f64], w: &[f64]) -> Option<(f64, f64, [[f64; 2]; 2], f64)> {
    let n = x.len();
    if n < 3 {
        return None;
    }
    let (mut s, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for i in 0..n {
        s += w[i];
        sx += w[i] * x[i];
        sy += w[i] * y[i];
        sxx += w[i] * x[i] * x[i];
        sxy += w[i] * x[i] * y[i];
    }
    let det = s * sxx - sx * sx;
    if !(det > 0.0) {
        return None;
    }
    let b = (s * sxy - sx * sy) / det;
    let a = (sxx * sy - sx * sxy) / det;
    let chi: f64 = (0..n).map(|i| w[i] * (y[i] - a - b * x[i]).powi(2)).sum();
    // Weights are relative: the scatter sets the scale; effective count from the weights.
    let neff = s * s / (0..n).map(|i| w[i] * w[i]).sum::<f64>();
    let var = chi / s * neff / (neff - 2.0).max(1.0);
    let k = var * s / neff;
    Some((
        a,
        b,
        [[k * sxx / det, -k * sx / det], [-k * sx / det, k * s / det]],
        var,
    ))
}

/// Delete-one-group jackknife standard deviations of the two outputs of `estimate`, run on
/// every subset that leaves out one of `groups` (indices into the points). Points inside a
/// group are correlated (one ridge, one stretch of neighbouring columns); the groups are taken
/// as independent, so the spread of the leave-one-out estimates is an honest uncertainty that
/// also catches a model that fits one part of the data differently from another. None with
/// fewer than three groups or when an estimate fails.
fn jackknife(
    groups: &[Vec<usize>],
    estimate: impl Fn(&[usize]) -> Option<(f64, f64)>,
) -> Option<(f64, f64)> {
    let k = groups.len();
    if k < 3 {
        return None;
    }
    let mut outs = Vec::with_capacity(k);
    for leave in 0..k {
        let idx: Vec<usize> = groups
            .iter()
            .enumerate()
            .filter(|(g, _)| *g != leave)
            .flat_map(|(_, v)| v.iter().copied())
            .collect();
        outs.push(estimate(&idx)?);
    }
    let kf = k as f64;
    let m0 = outs.iter().map(|o| o.0).sum::<f64>() / kf;
    let m1 = outs.iter().map(|o| o.1).sum::<f64>() / kf;
    let v0 = outs.iter().map(|o| (o.0 - m0).powi(2)).sum::<f64>() * (kf - 1.0) / kf;
    let v1 = outs.iter().map(|o| (o.1 - m1).powi(2)).sum::<f64>() * (kf - 1.0) / kf;
    Some((v0.sqrt(), v1.sqrt()))
}

/// A fall of 1/(e R_H) between neighbouring gate points larger than this many typical steps
/// (median |step|) is a sign change of the Hall coefficient, not noise.
const HALL_JUMP_STEPS: f64 = 10.0;

/// Method (a): the low-field Hall slope. None when the map has no R_xy or no classical range.
///
/// The uncertainty includes how much the answer moves when only the lower half of the
/// classical field range is used (the Drude slope bends as μB grows), added in quadrature.
pub fn from_hall_slope(map: &Map, v_hint: Option<f64>) -> Option<GateEstimate> {
    let (bmin, bmax) = (map.y().min(), map.y().max());
    let top = (bmin + 0.15 * (bmax - bmin))
        .min(bmin.max(0.0) + 1.5)
        .max(bmin + 0.3);
    let mut e = hall_slope_below(map, v_hint, top)?;
    if let Some(h) = hall_slope_below(map, v_hint, bmin + 0.5 * (top - bmin)) {
        let da = (h.alpha_cm2_per_v - e.alpha_cm2_per_v).abs();
        e.alpha_sigma_cm2_per_v = e.alpha_sigma_cm2_per_v.hypot(da);
        if let (Some(v1), Some(v2), Some(s)) = (e.v_cnp_v, h.v_cnp_v, e.v_cnp_sigma_v) {
            e.v_cnp_sigma_v = Some(s.hypot(v1 - v2));
        }
    }
    Some(e)
}

/// Method (a) with the rows of field ≤ `top` (T).
fn hall_slope_below(map: &Map, v_hint: Option<f64>, top: f64) -> Option<GateEstimate> {
    let rxy = &map.channel_of(ChannelKind::Rxy)?.data;
    let b = map.y().values();
    let v = map.x().values();
    let rows: Vec<usize> = (0..b.len())
        .filter(|&i| b[i] <= top && b[i].abs() > 1e-3)
        .collect();
    if rows.len() < 3 {
        return None;
    }
    // Per column: R_H from R_xy = c + R_H B, then y = 1/(e R_H).
    let mut y = vec![f64::NAN; v.len()];
    for (j, yj) in y.iter_mut().enumerate() {
        let (xs, ys): (Vec<f64>, Vec<f64>) = rows
            .iter()
            .filter(|&&i| rxy[[i, j]].is_finite())
            .map(|&i| (b[i], rxy[[i, j]]))
            .unzip();
        if xs.len() < 3 {
            continue;
        }
        if let Some((_, rh, _, _)) = wls(&xs, &ys, &vec![1.0; xs.len()]) {
            if rh.abs() > 0.0 {
                *yj = 1.0 / (ELEMENTARY_CHARGE * rh);
            }
        }
    }
    let cols: Vec<usize> = (0..v.len()).filter(|&j| y[j].is_finite()).collect();
    if cols.len() < 10 {
        return None;
    }
    // Orientation: the density should grow with gate voltage over most of the range.
    let rising = cols.windows(2).filter(|w| y[w[1]] > y[w[0]]).count();
    let sign = if 2 * rising >= cols.len() { 1.0 } else { -1.0 };
    let yy: Vec<f64> = cols.iter().map(|&j| sign * y[j]).collect();
    // Runs of rising y (allowing 4 falling steps of noise in a row); the longest with a zero
    // crossing. A fall from positive to negative far larger than the typical step is no noise
    // but the jump of 1/(e R_H) where the Hall coefficient changes sign away from neutrality
    // (a van Hove point of a superlattice band): it always ends the run. (At neutrality
    // itself 1/(e R_H) falls towards a pole on either side and jumps from −∞ to +∞: those
    // falls keep their sign.)
    let mut steps: Vec<f64> = yy.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    let typical = if steps.is_empty() {
        0.0
    } else {
        let mid = steps.len() / 2;
        *steps.select_nth_unstable_by(mid, f64::total_cmp).1
    };
    let mut best: Option<(usize, usize)> = None;
    let mut best_key: Option<f64> = None;
    let mut start = 0;
    let mut bad = 0;
    for k in 1..=yy.len() {
        let ok = k < yy.len() && yy[k] > yy[k - 1];
        let jump = k < yy.len()
            && yy[k - 1] > 0.0
            && yy[k] < 0.0
            && yy[k - 1] - yy[k] > HALL_JUMP_STEPS * typical;
        if k < yy.len() && !ok && !jump && bad < 4 {
            bad += 1;
            continue;
        }
        if !ok {
            let end = k;
            let crossing = (start + 1..end)
                .find(|&q| yy[q - 1] <= 0.0 && yy[q] > 0.0)
                .map(|q| v[cols[q]]);
            if let Some(vx) = crossing {
                // Nearest to the hint, else the longest.
                let key = match v_hint {
                    Some(h) => -(vx - h).abs(),
                    None => (end - start) as f64,
                };
                if best_key.is_none_or(|k| key > k) {
                    best_key = Some(key);
                    best = Some((start, end));
                }
            }
            start = k;
            bad = 0;
        } else {
            bad = 0;
        }
    }
    let (a, z) = best?;
    let seg: Vec<(f64, f64)> = (a..z).map(|q| (v[cols[q]], yy[q])).collect();
    let v0 = seg
        .windows(2)
        .find(|w| w[0].1 <= 0.0 && w[1].1 > 0.0)
        .map(|w| w[0].0 - w[0].1 * (w[1].0 - w[0].0) / (w[1].1 - w[0].1))?;
    let (lo, hi) = (seg[0].0, seg[seg.len() - 1].0);
    let half = 0.5 * (hi - lo);
    let trim = 0.1 * (hi - lo);
    let pts: Vec<(f64, f64)> = seg
        .iter()
        .copied()
        .filter(|&(x, _)| (x - v0).abs() > 0.25 * half && x > lo + trim && x < hi - trim)
        .collect();
    if pts.len() < 6 {
        return None;
    }
    let xs: Vec<f64> = pts.iter().map(|p| p.0).collect();
    let ys: Vec<f64> = pts.iter().map(|p| p.1).collect();
    let (c0, c1, cov, _) = wls(&xs, &ys, &vec![1.0; xs.len()])?;
    if !(c1 > 0.0) {
        return None;
    }
    // n = c0 + c1 V = α (V − V_CNP): α = c1, V_CNP = −c0/c1.
    let vc = -c0 / c1;
    let dv_dc0 = -1.0 / c1;
    let dv_dc1 = c0 / (c1 * c1);
    let var_vc = dv_dc0 * dv_dc0 * cov[0][0]
        + 2.0 * dv_dc0 * dv_dc1 * cov[0][1]
        + dv_dc1 * dv_dc1 * cov[1][1];
    // Neighbouring columns share the residual curvature of 1/(e R_H) against V (charge
    // puddles, the onset of Landau quantisation): a jackknife over eight contiguous blocks of
    // columns measures how much the answer depends on which stretch of gate is used.
    let nb = 8.min(xs.len() / 3);
    let blocks: Vec<Vec<usize>> = (0..nb)
        .map(|k| (k * xs.len() / nb..(k + 1) * xs.len() / nb).collect())
        .collect();
    let jk = jackknife(&blocks, |idx| {
        let x: Vec<f64> = idx.iter().map(|&i| xs[i]).collect();
        let y: Vec<f64> = idx.iter().map(|&i| ys[i]).collect();
        let (a, b, _, _) = wls(&x, &y, &vec![1.0; x.len()])?;
        let (alpha, v0) = (b, -a / b);
        (alpha > 0.0).then_some((alpha, v0))
    });
    let (sa_jk, sv_jk) = jk.unwrap_or((0.0, 0.0));
    Some(GateEstimate {
        alpha_cm2_per_v: c1 / 1e4,
        alpha_sigma_cm2_per_v: cov[1][1].sqrt().max(sa_jk) / 1e4,
        v_cnp_v: Some(vc),
        v_cnp_sigma_v: Some(var_vc.max(0.0).sqrt().max(sv_jk)),
        method: CalibrationMethod::HallSlope,
        points: pts.len(),
    })
}

/// Method (c): the geometric lever arm of the gate dielectric.
pub fn from_geometry(dielectric: &Dielectric) -> Result<GateEstimate> {
    Ok(GateEstimate {
        alpha_cm2_per_v: dielectric.lever_arm()? / 1e4,
        alpha_sigma_cm2_per_v: 0.0,
        v_cnp_v: None,
        v_cnp_sigma_v: None,
        method: CalibrationMethod::Geometry,
        points: 0,
    })
}

/// Strong high-field minima used by method (b): (V, B, weight).
fn strong_points(
    map: &Map,
    minima: &[MinimumPoint],
    min_field_fraction: f64,
) -> Vec<(f64, f64, f64)> {
    let (bmin, bmax) = (map.y().min(), map.y().max());
    let bcut = (bmin + min_field_fraction * (bmax - bmin)).max(0.2);
    let mut pts: Vec<(f64, f64, f64)> = minima
        .iter()
        .filter(|p| p.field_t >= bcut && p.prominence >= 5.0 && p.gate_v.is_finite())
        .map(|p| (p.gate_v, p.field_t, p.prominence.min(50.0)))
        .collect();
    pts.sort_by(|a, b| b.2.total_cmp(&a.2));
    pts.truncate(6000);
    pts
}

/// Sharpness of the slope histogram for V_CNP = `vc`, and the histogram itself.
fn slope_histogram(pts: &[(f64, f64, f64)], vc: f64, dk: f64, kmax: f64) -> (f64, Vec<f64>) {
    let nb = (2.0 * kmax / dk).ceil() as usize + 3;
    let mut h = vec![0.0; nb];
    for &(v, b, w) in pts {
        let f = ((v - vc) / b + kmax) / dk;
        if f >= 0.0 && f < (nb - 1) as f64 {
            let i = f.floor() as usize;
            let u = f - i as f64;
            h[i] += w * (1.0 - u);
            h[i + 1] += w * u;
        }
    }
    let sm: Vec<f64> = (0..nb)
        .map(|i| {
            let a = if i > 0 { h[i - 1] } else { 0.0 };
            let c = if i + 1 < nb { h[i + 1] } else { 0.0 };
            0.25 * a + 0.5 * h[i] + 0.25 * c
        })
        .collect();
    (sm.iter().map(|x| x * x).sum(), sm)
}

/// Method (b): the quantum Hall fan. `hint` (e.g. from the Hall slope) breaks scale
/// ambiguities when the fan alone cannot. None when too few strong minima are found.
pub fn from_quantum_hall(
    map: &Map,
    minima: &[MinimumPoint],
    stack: Stack,
    hint: Option<&GateEstimate>,
    notes: &mut Vec<String>,
) -> Option<GateEstimate> {
    let pts = strong_points(map, minima, 0.4);
    if pts.len() < 20 {
        return None;
    }
    let x = map.x();
    let dx = (x.max() - x.min()) / (x.len() - 1) as f64;
    let bmax = pts.iter().map(|p| p.1).fold(0.0, f64::max);
    let bmin = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
    let kmax = (x.max() - x.min()) / bmin;
    let dk = dx / bmax;
    // Coarse then fine search of V_CNP.
    let span = x.max() - x.min();
    let coarse = 400;
    let sharp: Vec<(f64, f64)> = (0..=coarse)
        .map(|i| {
            let vc = x.min() + span * i as f64 / coarse as f64;
            (slope_histogram(&pts, vc, dk, kmax).0, vc)
        })
        .collect();
    let smax = sharp.iter().map(|p| p.0).fold(0.0, f64::max);
    let mut best = sharp
        .iter()
        .copied()
        .max_by(|a, b| a.0.total_cmp(&b.0))
        .unwrap_or((0.0, x.min()));
    if stack.is_moire() {
        // Satellite fans converge too (at s = ±4): the main fan's point lies between them.
        let maxima: Vec<(f64, f64)> = (1..sharp.len() - 1)
            .filter(|&i| {
                sharp[i].0 >= 0.3 * smax
                    && sharp[i].0 >= sharp[i - 1].0
                    && sharp[i].0 > sharp[i + 1].0
            })
            .map(|i| sharp[i])
            .collect();
        if maxima.len() >= 2 {
            let mid = if maxima.len() >= 3 {
                0.5 * (maxima[0].1 + maxima[maxima.len() - 1].1)
            } else {
                0.5 * (x.min() + x.max())
            };
            if let Some(&m) = maxima
                .iter()
                .min_by(|a, b| (a.1 - mid).abs().total_cmp(&(b.1 - mid).abs()))
            {
                if m != best {
                    notes.push(format!(
                        "fans converge at several gate voltages; the middle one, {:.3} V, is taken as charge neutrality",
                        m.1
                    ));
                }
                best = m;
            }
        }
    }
    let step = span / coarse as f64;
    let mut fine = best;
    for i in -40..=40 {
        let vc = best.1 + step * i as f64 / 20.0;
        let (s, _) = slope_histogram(&pts, vc, dk, kmax);
        if s > fine.0 {
            fine = (s, vc);
        }
    }
    let vc0 = fine.1;
    let (_, hist) = slope_histogram(&pts, vc0, dk, kmax);
    // Peaks of the histogram: (k, weight).
    let hmax = hist.iter().copied().fold(0.0, f64::max);
    let mut peaks: Vec<(f64, f64)> = Vec::new();
    for i in 2..hist.len().saturating_sub(2) {
        if hist[i] > 0.03 * hmax && hist[i] >= hist[i - 1] && hist[i] > hist[i + 1] {
            let k = i as f64 * dk - kmax;
            let w: f64 = hist[i - 2..=i + 2].iter().sum();
            if k.abs() > 2.0 * dk {
                peaks.push((k, w));
            }
        }
    }
    if peaks.len() < 2 {
        return None;
    }
    peaks.sort_by(|a, b| b.1.total_cmp(&a.1));
    let seq = stack.sequence(80);
    let score_alpha = |alpha: f64| -> f64 {
        let (mut matched, mut unmatched, mut wm, mut nm) = (0.0, 0.0, 0.0, 0usize);
        let mut hit: Vec<i64> = Vec::new();
        for &(k, w) in &peaks {
            let nu = k * alpha / E_OVER_H;
            let m = seq
                .iter()
                .map(|&s| s as f64 * nu.signum())
                .min_by(|a, b| (a - nu).abs().total_cmp(&(b - nu).abs()));
            match m {
                Some(m) if (m - nu).abs() < 0.2 => {
                    matched += w;
                    wm += w;
                    nm += 1;
                    hit.push(m as i64);
                }
                _ => unmatched += w,
            }
        }
        let top = hit.iter().map(|m| m.abs()).max().unwrap_or(0);
        let missing = seq
            .iter()
            .filter(|&&s| s <= top)
            .flat_map(|&s| [s, -s])
            .filter(|m| !hit.contains(m))
            .count();
        let mean = if nm > 0 { wm / nm as f64 } else { 0.0 };
        matched - 0.5 * unmatched - 0.5 * missing as f64 * mean
    };
    let mut trials: Vec<(f64, f64)> = Vec::new();
    for &(k, _) in peaks.iter().take(12) {
        for &m in seq.iter().take(6) {
            let alpha = m as f64 * E_OVER_H / k.abs();
            trials.push((score_alpha(alpha), alpha));
        }
    }
    trials.sort_by(|a, b| b.0.total_cmp(&a.0));
    let mut alpha0 = trials.first()?.1;
    if let Some(h) = hint {
        let ah = h.alpha_cm2_per_v * 1e4;
        if (alpha0 / ah - 1.0).abs() > 0.3 {
            if let Some(&(_, a)) = trials
                .iter()
                .find(|(s, a)| (a / ah - 1.0).abs() < 0.3 && *s > 0.0)
            {
                notes.push(format!(
                    "the fan alone preferred α = {:.4e} cm⁻²/V; the Hall slope chose α = {:.4e}",
                    alpha0 / 1e4,
                    a / 1e4
                ));
                alpha0 = a;
            }
        }
    }
    fit_fan(&pts, &seq, vc0, 1.0 / alpha0, dx, f64::INFINITY)
}

/// Least squares of V against X = ν(e/h)B over the strong minima `pts` (V, B, weight), each
/// assigned to the nearest member ν of the degenerate sequence `seq` for the current gate
/// model, three times, starting from V_CNP = `vc0` and 1/α = `inv_alpha0`. Minima farther
/// than `n_limit_m2` from charge neutrality in density are left out. The uncertainty is the
/// jackknife over whole lines, with half the difference between the fits to the lower and the
/// upper half of the field range added in quadrature.
fn fit_fan(
    pts: &[(f64, f64, f64)],
    seq: &[i64],
    vc0: f64,
    inv_alpha0: f64,
    dx: f64,
    n_limit_m2: f64,
) -> Option<GateEstimate> {
    let (mut vc, mut inv_alpha) = (vc0, inv_alpha0);
    let mut result = None;
    for _ in 0..3 {
        let (mut xs, mut ys, mut ws, mut lines) = (Vec::new(), Vec::new(), Vec::new(), Vec::new());
        for &(v, b, w) in pts {
            if ((v - vc) / inv_alpha).abs() > n_limit_m2 {
                continue;
            }
            let nu = (v - vc) / (inv_alpha * E_OVER_H * b);
            let m = seq
                .iter()
                .map(|&s| s as f64 * nu.signum())
                .min_by(|a, c| (a - nu).abs().total_cmp(&(c - nu).abs()));
            if let Some(m) = m {
                let tol = 0.15 + 2.0 * dx / (inv_alpha * E_OVER_H * b);
                if (m - nu).abs() < tol {
                    xs.push(m * E_OVER_H * b);
                    ys.push(v);
                    ws.push(w);
                    lines.push(m as i64);
                }
            }
        }
        let (a, c, cov, _) = wls(&xs, &ys, &ws)?;
        if !(c > 0.0) {
            return None;
        }
        vc = a;
        inv_alpha = c;
        result = Some((a, c, cov, xs, ys, ws, lines));
    }
    let (a, c, cov, xs, ys, ws, lines) = result?;
    let n = xs.len();
    let alpha = 1.0 / c;
    // The minima along one ridge share its disorder and its width, so they are not
    // independent: the uncertainty is the jackknife over whole lines (each ν one group).
    let mut ids: Vec<i64> = lines.clone();
    ids.sort_unstable();
    ids.dedup();
    let groups: Vec<Vec<usize>> = ids
        .iter()
        .map(|&m| (0..n).filter(|&i| lines[i] == m).collect())
        .filter(|g: &Vec<usize>| g.len() >= 3)
        .collect();
    let jk = jackknife(&groups, |idx| {
        let x: Vec<f64> = idx.iter().map(|&i| xs[i]).collect();
        let y: Vec<f64> = idx.iter().map(|&i| ys[i]).collect();
        let w: Vec<f64> = idx.iter().map(|&i| ws[i]).collect();
        let (a, c, _, _) = wls(&x, &y, &w)?;
        (c > 0.0).then(|| (1.0 / c, a))
    });
    let (sa_jk, sv_jk) = jk.unwrap_or((0.0, 0.0));
    // The minima of low and of high fields sit differently in broad plateaus (a ridge's
    // minimum drifts within its plateau as the gap opens): half the difference of fits to the
    // two halves of the field range is added in quadrature, as a systematic part.
    let (sa_split, sv_split) = {
        let mut bs: Vec<f64> = (0..n)
            .map(|i| xs[i] / (lines[i] as f64 * E_OVER_H))
            .collect();
        let mid = bs.len() / 2;
        let b_mid = if bs.is_empty() {
            f64::NAN
        } else {
            *bs.select_nth_unstable_by(mid, f64::total_cmp).1
        };
        let half = |upper: bool| {
            let idx: Vec<usize> = (0..n)
                .filter(|&i| (xs[i] / (lines[i] as f64 * E_OVER_H) > b_mid) == upper)
                .collect();
            let x: Vec<f64> = idx.iter().map(|&i| xs[i]).collect();
            let y: Vec<f64> = idx.iter().map(|&i| ys[i]).collect();
            let w: Vec<f64> = idx.iter().map(|&i| ws[i]).collect();
            let (a, c, _, _) = wls(&x, &y, &w)?;
            (c > 0.0).then(|| (1.0 / c, a))
        };
        match (half(false), half(true)) {
            (Some(lo), Some(hi)) => (0.5 * (lo.0 - hi.0).abs(), 0.5 * (lo.1 - hi.1).abs()),
            _ => (0.0, 0.0),
        }
    };
    Some(GateEstimate {
        alpha_cm2_per_v: alpha / 1e4,
        alpha_sigma_cm2_per_v: (cov[1][1].sqrt() * alpha * alpha)
            .max(sa_jk)
            .hypot(sa_split)
            / 1e4,
        v_cnp_v: Some(a),
        v_cnp_sigma_v: Some(cov[0][0].sqrt().max(sv_jk).hypot(sv_split)),
        method: CalibrationMethod::QuantumHall,
        points: n,
    })
}

/// The order in which [`choose`] prefers the methods: the quantum Hall fit, the Hall slope,
/// geometry.
pub const FAN_FIRST: [CalibrationMethod; 3] = [
    CalibrationMethod::QuantumHall,
    CalibrationMethod::HallSlope,
    CalibrationMethod::Geometry,
];

/// The order for a moiré device with a precise Hall slope: the Hall slope, the quantum Hall
/// fit, geometry.
pub const HALL_FIRST: [CalibrationMethod; 3] = [
    CalibrationMethod::HallSlope,
    CalibrationMethod::QuantumHall,
    CalibrationMethod::Geometry,
];

/// Choose among the estimates the first found in `order` (V_CNP from the largest low-field
/// R_xx when the chosen one has none).
pub fn choose(
    map: &Map,
    estimates: Vec<GateEstimate>,
    mut notes: Vec<String>,
    order: &[CalibrationMethod],
) -> Result<Calibration> {
    let pick = order
        .iter()
        .find_map(|m| estimates.iter().find(|e| e.method == *m).copied())
        .ok_or_else(|| {
            Error::MapRequirement(
                "no calibration could be found: the map shows neither a quantum Hall fan nor a \
                 low-field Hall slope; give --calibration or the dielectric"
                    .into(),
            )
        })?;
    let (v, sv) = match (pick.v_cnp_v, pick.v_cnp_sigma_v) {
        (Some(v), Some(s)) => (v, s),
        _ => {
            let v = low_field_peak(map);
            notes.push("V_CNP taken from the largest low-field R_xx".into());
            (v, (map.x().max() - map.x().min()) / (map.x().len() as f64))
        }
    };
    if let (Some(a), Some(b)) = (
        estimates
            .iter()
            .find(|e| e.method == CalibrationMethod::HallSlope),
        estimates
            .iter()
            .find(|e| e.method == CalibrationMethod::QuantumHall),
    ) {
        let d = (a.alpha_cm2_per_v - b.alpha_cm2_per_v).abs();
        let s = a.alpha_sigma_cm2_per_v.hypot(b.alpha_sigma_cm2_per_v);
        if d > 3.0 * s {
            notes.push(format!(
                "Hall-slope and quantum Hall lever arms differ by {:.1} standard deviations",
                d / s.max(1e-300)
            ));
        }
    }
    // A finding reached by both passes of the fan fit is said once.
    let mut said = std::collections::HashSet::new();
    notes.retain(|n| said.insert(n.clone()));
    Ok(Calibration {
        alpha_cm2_per_v: pick.alpha_cm2_per_v,
        alpha_sigma_cm2_per_v: pick.alpha_sigma_cm2_per_v,
        v_cnp_v: v,
        v_cnp_sigma_v: sv,
        method: pick.method,
        methods: estimates,
        notes,
    })
}

/// Smallest ratio of an insulating peak's R_xx to the median of its trace.
const PEAK_OVER_MEDIAN: f64 = 3.0;
/// Smallest fall of R_xx on each side of an insulating peak, as a ratio (within a tenth of the
/// gate range, or before a higher point): a shoulder on a broader peak is not a peak.
const PEAK_OVER_SIDES: f64 = 2.0;

/// Gate voltages (V) of the insulating peaks of R_xx at the lowest field of `map`: local
/// maxima at least [`PEAK_OVER_MEDIAN`] times the median of the trace, falling by at least
/// [`PEAK_OVER_SIDES`] on both sides (a peak at the edge of the gate range, with no lower
/// ground beyond it, is not counted). R_xx is taken in log scale over the rows within 0.1 T of
/// the lowest |B| (their mean), smoothed by a five-point running median against spikes.
/// A monolayer or bilayer shows one, at charge neutrality; an aligned moiré device also shows
/// the band insulators at s = ±4 (and sometimes correlated states between them).
pub fn insulating_peaks(map: &Map) -> Vec<f64> {
    let Some(c) = map.channel_of(ChannelKind::Rxx) else {
        return Vec::new();
    };
    let (x, y) = (map.x().values(), map.y().values());
    let low = y.iter().map(|b| b.abs()).fold(f64::INFINITY, f64::min);
    let rows: Vec<usize> = (0..y.len()).filter(|&i| y[i].abs() <= low + 0.1).collect();
    let cols = x.len();
    if rows.is_empty() || cols < 5 {
        return Vec::new();
    }
    let logs: Vec<f64> = (0..cols)
        .map(|j| {
            let v: Vec<f64> = rows
                .iter()
                .map(|&i| c.data[[i, j]])
                .filter(|r| r.is_finite() && *r > 0.0)
                .map(f64::log10)
                .collect();
            if v.is_empty() {
                f64::NAN
            } else {
                v.iter().sum::<f64>() / v.len() as f64
            }
        })
        .collect();
    let trace: Vec<f64> = (0..cols)
        .map(|j| median(logs[j.saturating_sub(2)..(j + 3).min(cols)].iter().copied()))
        .collect();
    let base = median(trace.iter().copied());
    if !base.is_finite() {
        return Vec::new();
    }
    let reach = (cols / 10).max(2);
    let fall = PEAK_OVER_SIDES.log10();
    // Whether the trace falls by `fall` on the side of `j` that `dir` steps to, within `reach`
    // columns and before any higher point (not at the edge of the trace without lower ground).
    let falls = |j: usize, dir: isize| -> bool {
        let mut k = j as isize;
        for _ in 0..reach {
            k += dir;
            if k < 0 || k >= cols as isize || trace[k as usize] > trace[j] {
                return false;
            }
            if trace[k as usize] <= trace[j] - fall {
                return true;
            }
        }
        false
    };
    let mut peaks = Vec::new();
    let mut j = 0;
    while j < cols {
        let v = trace[j];
        // The first column of a plateau of equal values stands for it.
        let top = v.is_finite()
            && v >= base + PEAK_OVER_MEDIAN.log10()
            && (j == 0 || trace[j - 1] < v)
            && (j + 1 == cols || trace[j + 1] <= v);
        if top && falls(j, -1) && falls(j, 1) {
            peaks.push(x[j]);
            j += reach.min(cols);
            continue;
        }
        j += 1;
    }
    peaks
}

fn low_field_peak(map: &Map) -> f64 {
    let x = map.x().values();
    match map.channel_of(ChannelKind::Rxx) {
        Some(c) => {
            let row = c.data.row(0);
            let j = (0..x.len())
                .filter(|&j| row[j].is_finite())
                .max_by(|&a, &b| row[a].total_cmp(&row[b]))
                .unwrap_or(x.len() / 2);
            x[j]
        }
        None => median(x.iter().copied()),
    }
}

/// How far above the chance level of the n₀ scan, in robust standard deviations, the best
/// n₀ must score to be taken as a superlattice (synthetic moiré maps score 6–15, maps of
/// devices without one about 1).
pub const SUPERLATTICE_MIN_Z: f64 = 4.0;

/// The moiré density from the satellite fans and band insulators at s = ±4: a search over n₀
/// between `n0_range_m2`, then least squares over the minima on those lines.
pub fn moire_density(
    map: &Map,
    minima: &[MinimumPoint],
    gate: &SingleGate,
    stack: Stack,
    mismatch: f64,
) -> Option<MoireEstimate> {
    let x = map.x();
    let dn = gate.alpha_m2_per_v * (x.max() - x.min()) / (x.len() - 1) as f64;
    let nmax = [x.min(), x.max()]
        .iter()
        .map(|&v| gate.density(v).abs())
        .fold(0.0, f64::max);
    let mut pts: Vec<(f64, f64, f64)> = minima
        .iter()
        .filter(|p| p.prominence >= 5.0 && p.field_t > 0.3 && p.gate_v.is_finite())
        .map(|p| (gate.density(p.gate_v), p.field_t, p.prominence.min(50.0)))
        .collect();
    pts.sort_by(|a, b| b.2.total_cmp(&a.2));
    pts.truncate(5000);
    if pts.len() < 20 {
        return None;
    }
    let mut ts: Vec<f64> = vec![0.0];
    for m in stack.sequence(14) {
        ts.push(m as f64);
        ts.push(-(m as f64));
    }
    let near = |n0: f64, n: f64, b: f64| -> (f64, f64) {
        let mut best = (f64::INFINITY, 0.0);
        for s in [-4.0, 4.0] {
            for &t in &ts {
                let d = (n - t * E_OVER_H * b - s * n0).abs();
                if d < best.0 {
                    best = (d, s);
                }
            }
        }
        best
    };
    let tau = |b: f64| (1.5 * dn).max(0.03 * E_OVER_H * b);
    let (lo, hi) = (nmax / 12.0, nmax / 3.6);
    if !(hi > lo) {
        return None;
    }
    let steps = 800;
    let mut best = (f64::NEG_INFINITY, lo);
    let mut all = Vec::with_capacity(steps + 1);
    for i in 0..=steps {
        let n0 = lo * (hi / lo).powf(i as f64 / steps as f64);
        let sc: f64 = pts
            .iter()
            .map(|&(n, b, w)| {
                let (d, _) = near(n0, n, b);
                let u = d / tau(b);
                w * (-0.5 * u * u).exp()
            })
            .sum();
        all.push(sc);
        if sc > best.0 {
            best = (sc, n0);
        }
    }
    // A superlattice must stand out of the chance coincidences of the scan: its score at
    // least SUPERLATTICE_MIN_Z robust standard deviations (1.4826 × the median absolute
    // deviation, the normal-equivalent scale) above the scan's median. (A ratio to the median
    // would not do: a dense map's many minima raise the chance level with the peak.)
    let level = median(all.iter().copied());
    let spread = 1.4826 * median(all.iter().map(|v| (v - level).abs()));
    if !(best.0 - level >= SUPERLATTICE_MIN_Z * spread) || !(spread > 0.0) {
        return None;
    }
    let mut n0 = best.1;
    let mut out = None;
    for _ in 0..3 {
        let (mut num, mut den, mut used) = (0.0, 0.0, Vec::new());
        for &(n, b, w) in &pts {
            let (d, s) = near(n0, n, b);
            if d < 2.0 * tau(b) {
                // The nearest line's t: recompute to subtract it.
                let t = ts
                    .iter()
                    .copied()
                    .min_by(|a, c| {
                        (n - a * E_OVER_H * b - s * n0)
                            .abs()
                            .total_cmp(&(n - c * E_OVER_H * b - s * n0).abs())
                    })
                    .unwrap_or(0.0);
                let r = (n - t * E_OVER_H * b) / s;
                num += w * r;
                den += w;
                used.push((r, w));
            }
        }
        if used.len() < 10 || !(den > 0.0) {
            return None;
        }
        n0 = num / den;
        let var = used.iter().map(|(r, w)| w * (r - n0).powi(2)).sum::<f64>() / den;
        let neff = den * den / used.iter().map(|(_, w)| w * w).sum::<f64>();
        out = Some((n0, (var / neff).sqrt(), used.len()));
    }
    let (n0, sn0, count) = out?;
    if !(n0 >= lo && n0 <= hi) {
        return None;
    }
    let moire = crate::moire::Moire::from_n0(n0).ok()?;
    Some(MoireEstimate {
        n0_cm2: n0 / 1e4,
        n0_sigma_cm2: sn0 / 1e4,
        n_s_cm2: 4.0 * n0 / 1e4,
        lambda_nm: moire.lambda_m * 1e9,
        twist_deg: moire
            .graphene_hbn_twist_deg(crate::moire::GRAPHENE_LATTICE_M, mismatch)
            .ok(),
        points: count,
    })
}

/// Outer edge of the main Dirac cone's Landau fan in a moiré device, in units of n₀: beyond
/// |n| ≈ 2n₀ the satellite cones' fans and the Hofstadter lines take over, so minima there
/// are not main-fan states (1.5 leaves room for the crossover and for n₀'s uncertainty).
pub const MAIN_CONE_LIMIT_N0: f64 = 1.5;

/// Method (b) again, started from `start` and using only the minima inside the main cone,
/// |n| < [`MAIN_CONE_LIMIT_N0`]·n₀ (`n0_m2` in m⁻²): in a moiré device the satellite fans'
/// and minigaps' minima beyond it would otherwise be assigned to main-fan filling factors and
/// bias α. None when the refit fails.
pub fn refine_on_main_cone(
    map: &Map,
    minima: &[MinimumPoint],
    stack: Stack,
    start: &GateEstimate,
    n0_m2: f64,
) -> Option<GateEstimate> {
    let pts = strong_points(map, minima, 0.4);
    let x = map.x();
    let dx = (x.max() - x.min()) / (x.len().max(2) - 1) as f64;
    let vc0 = start.v_cnp_v?;
    let alpha = start.alpha_cm2_per_v * 1e4;
    if !(alpha > 0.0 && n0_m2 > 0.0) || pts.len() < 20 {
        return None;
    }
    fit_fan(
        &pts,
        &stack.sequence(80),
        vc0,
        1.0 / alpha,
        dx,
        MAIN_CONE_LIMIT_N0 * n0_m2,
    )
}

/// Largest relative uncertainty of a Hall-slope lever arm that may referee the fan's scale:
/// a 30 % disagreement is then at least three of its standard deviations. (A map whose field
/// starts high or whose gate range is short leaves only a few classical-range points.)
pub const REFEREE_MAX_RELATIVE_SIGMA: f64 = 0.1;

/// Whether the Hall-slope estimate `a` is precise enough to referee the fan's scale.
fn can_referee(a: &GateEstimate) -> bool {
    a.alpha_sigma_cm2_per_v.is_finite()
        && a.alpha_sigma_cm2_per_v <= REFEREE_MAX_RELATIVE_SIGMA * a.alpha_cm2_per_v.abs()
}

/// Methods (a) and (b) together: (b) alone first, (a) near its V_CNP, and (b) again with (a)
/// as the referee of the scale when they disagree by more than 30 % and (a) is precise enough
/// to tell ([`REFEREE_MAX_RELATIVE_SIGMA`]); (c) when a dielectric is given. Returns the
/// chosen calibration with every estimate.
pub fn calibrate_map(
    map: &Map,
    minima: &[MinimumPoint],
    stack: Stack,
    dielectric: Option<&Dielectric>,
) -> Result<Calibration> {
    let mut notes = Vec::new();
    let mut b = from_quantum_hall(map, minima, stack, None, &mut notes);
    let a = from_hall_slope(map, b.and_then(|e| e.v_cnp_v));
    if let (Some(ea), Some(eb)) = (a, b) {
        let apart = (eb.alpha_cm2_per_v / ea.alpha_cm2_per_v - 1.0).abs() > 0.3;
        if apart && !can_referee(&ea) {
            notes.push(format!(
                "the low-field Hall slope (α = {:.4e} ± {:.1e} cm⁻²/V from {} points) is too \
                 uncertain to check the quantum Hall fan's scale (α = {:.4e} cm⁻²/V)",
                ea.alpha_cm2_per_v, ea.alpha_sigma_cm2_per_v, ea.points, eb.alpha_cm2_per_v
            ));
        } else if apart {
            b = from_quantum_hall(map, minima, stack, Some(&ea), &mut notes);
            if let Some(eb) = b {
                if (eb.alpha_cm2_per_v / ea.alpha_cm2_per_v - 1.0).abs() > 0.3 {
                    notes.push(format!(
                        "the quantum Hall fan gave α = {:.4e} cm⁻²/V, far from the Hall slope; \
                         it is not used",
                        eb.alpha_cm2_per_v
                    ));
                    b = None;
                }
            }
        }
    }
    if stack.is_moire() {
        // The superlattice is searched with the fan's gate model, else with the Hall slope's
        // (a fan fitted to the wrong scale finds no satellites); the fan is then refitted
        // inside the main cone starting from the model that found them.
        let found = [b, a].into_iter().flatten().find_map(|e| {
            moire_density(
                map,
                minima,
                &e.gate(0.0),
                stack,
                crate::moire::HBN_MISMATCH_DEFAULT,
            )
            .map(|m| (e, m))
        });
        if let Some((start, m)) = found {
            if let Some(r) = refine_on_main_cone(map, minima, stack, &start, m.n0_cm2 * 1e4) {
                notes.push(format!(
                    "the fan was refitted inside the main cone (|n| < {MAIN_CONE_LIMIT_N0} n₀) \
                     from the {} model: α {:.4e} → {:.4e} cm⁻²/V",
                    start.method.name(),
                    start.alpha_cm2_per_v,
                    r.alpha_cm2_per_v
                ));
                b = Some(r);
            }
        }
    }
    if !stack.is_moire() {
        let peaks = insulating_peaks(map);
        if peaks.len() >= 2 {
            let at: Vec<String> = peaks.iter().map(|v| format!("{v:.3}")).collect();
            notes.push(format!(
                "R_xx at the lowest field has {} insulating peaks (V_g = {} V) where a {} \
                 device has one, at charge neutrality: if this is a moiré device, choose the \
                 monolayer-moire stack, or the fan may be anchored on a band insulator",
                peaks.len(),
                at.join(", "),
                stack.name()
            ));
        }
    }
    // In a moiré device the fan's scale rests on assigning each minimum a main-fan filling,
    // and the satellite fans, the symmetry-broken states and the Hofstadter minigaps crowd the
    // main cone with minima that a fan fit can take for its own: a precise classical Hall slope
    // measures the density directly and is taken first.
    let order = match a {
        Some(ea) if stack.is_moire() && can_referee(&ea) => {
            if b.is_some() {
                notes.push(
                    "moiré device: the low-field Hall slope is chosen over the quantum Hall \
                     fan, whose filling assignments the satellite and Hofstadter minima can bias"
                        .into(),
                );
            }
            HALL_FIRST
        }
        _ => FAN_FIRST,
    };
    let mut est: Vec<GateEstimate> = [b, a].into_iter().flatten().collect();
    if let Some(d) = dielectric {
        est.push(from_geometry(d)?);
    }
    choose(map, est, notes, &order)
}

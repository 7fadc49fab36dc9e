//! Savitzky–Golay smoothing and derivatives along either axis of a 2D array or map channel.
//!
//! Each output point is the value (or k-th derivative) at that point of the least-squares
//! polynomial of degree `order` fitted to the `window` points around it.
//!
//! * **Uniform axis**: the fit reduces to a convolution with fixed coefficients, computed once
//!   (they equal the classical tables, e.g. (−3, 12, 17, 12, −3)/35 for 5-point quadratic
//!   smoothing) and divided by Δx^k.
//! * **Non-uniform axis**: a local least-squares fit in each window on the actual coordinates
//!   (the weights depend only on the position along the axis, so they are computed once per
//!   position and reused for every row or column).
//! * **Edges**: the window keeps its full size and is shifted inward; the fitted polynomial is
//!   evaluated at the edge point itself. Edge values are therefore extrapolations of a one-sided
//!   fit and noisier than interior ones, but never padded or invented.
//! * **Missing data**: where the window holds NaN (or ±∞) values, the fit uses only the finite
//!   points in it, on their true coordinates; the result is NaN if fewer than `order + 1`
//!   finite points remain, and NaN wherever the input point itself is NaN (nothing is filled in).
//! * **Derivatives**: derivative k includes the k! factor and is divided by Δx^k, so it is a
//!   derivative in the axis's SI unit (e.g. Ω/V along a gate axis).
//!
//! Rows (for derivatives along x) or output rows (along y) are processed in parallel.

use crate::error::{Error, Result};
use crate::map::{Channel, ChannelKind, Map};
use ndarray::{Array2, ArrayView2, Axis as NdAxis, Zip};
use rayon::prelude::*;

/// Relative tolerance on spacings under which an axis counts as uniform.
const UNIFORM_REL_TOL: f64 = 1e-9;

/// One Savitzky–Golay filter: odd window length, polynomial order and derivative order.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct SavgolSpec {
    /// Number of points in the window (odd, ≥ 1).
    pub window: usize,
    /// Degree of the fitted polynomial (< window).
    pub order: usize,
    /// Derivative returned: 0 smooths, 1 gives the first derivative, … (≤ order).
    pub deriv: usize,
}

impl SavgolSpec {
    /// A checked filter specification.
    pub fn new(window: usize, order: usize, deriv: usize) -> Result<SavgolSpec> {
        let s = SavgolSpec {
            window,
            order,
            deriv,
        };
        s.validate()?;
        Ok(s)
    }
    /// Errors unless the window is odd, order < window and deriv ≤ order.
    pub fn validate(&self) -> Result<()> {
        if self.window % 2 == 0 {
            return Err(Error::invalid(
                "Savitzky–Golay window",
                format!("must be an odd number of points, got {}", self.window),
            ));
        }
        if self.order >= self.window {
            return Err(Error::invalid(
                "Savitzky–Golay order",
                format!(
                    "must be below the window length {}, got {}",
                    self.window, self.order
                ),
            ));
        }
        if self.deriv > self.order {
            return Err(Error::invalid(
                "Savitzky–Golay derivative",
                format!(
                    "derivative {} exceeds the polynomial order {} (it would be identically zero)",
                    self.deriv, self.order
                ),
            ));
        }
        Ok(())
    }
    /// Half-width m = (window − 1)/2.
    pub fn half_width(&self) -> usize {
        self.window / 2
    }
}

/// The direction along which a 2D array is filtered.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Along {
    /// Along the columns index (within each row): the map's `x` axis.
    X,
    /// Along the rows index (within each column): the map's `y` axis.
    Y,
}

/// Weights w_i such that Σ w_i y_i is the `deriv`-th derivative at `x0` of the least-squares
/// polynomial of degree `order` through the points (xs_i, y_i). Includes the k! factor; the
/// result is in units of y per unit of x^k. `None` if fewer than `order + 1` distinct points.
///
/// Computed by a QR factorisation (modified Gram–Schmidt, two passes) of the design matrix in
/// the scaled coordinate t = (x − x0)/h, h = max|x − x0|, which keeps high orders well conditioned.
pub fn fit_weights(xs: &[f64], x0: f64, order: usize, deriv: usize) -> Option<Vec<f64>> {
    let n = xs.len();
    let p = order + 1;
    if n < p || deriv > order {
        return None;
    }
    let mut h = xs.iter().map(|&x| (x - x0).abs()).fold(0.0, f64::max);
    if !h.is_finite() {
        return None;
    }
    if h == 0.0 {
        h = 1.0;
    }
    let t: Vec<f64> = xs.iter().map(|&x| (x - x0) / h).collect();
    // q[j] holds column j of Q; r_cols[j][k] = R[k][j], the upper-triangular R by columns.
    let mut q: Vec<Vec<f64>> = Vec::with_capacity(p);
    let mut r_cols: Vec<Vec<f64>> = Vec::with_capacity(p);
    for j in 0..p {
        let mut v: Vec<f64> = t.iter().map(|&ti| ti.powi(j as i32)).collect();
        let norm0 = v.iter().map(|a| a * a).sum::<f64>().sqrt();
        let mut rc = vec![0.0; p];
        for _pass in 0..2 {
            for (rk, qk) in rc.iter_mut().zip(&q) {
                let dot: f64 = qk.iter().zip(&v).map(|(a, b)| a * b).sum();
                *rk += dot;
                for (vi, qi) in v.iter_mut().zip(qk) {
                    *vi -= dot * qi;
                }
            }
        }
        let norm = v.iter().map(|a| a * a).sum::<f64>().sqrt();
        // Rank deficient (too few distinct points) or non-finite.
        if norm.is_nan() || norm <= 1e-10 * norm0.max(f64::MIN_POSITIVE) {
            return None;
        }
        rc[j] = norm;
        v.iter_mut().for_each(|a| *a /= norm);
        q.push(v);
        r_cols.push(rc);
    }
    // Solve Rᵀ z = e_deriv by forward substitution: row i of Rᵀ is column i of R.
    let mut z: Vec<f64> = Vec::with_capacity(p);
    for (i, rc) in r_cols.iter().enumerate() {
        let rhs = if i == deriv { 1.0 } else { 0.0 };
        let s: f64 = rc.iter().zip(&z).map(|(a, b)| a * b).sum();
        z.push((rhs - s) / rc[i]);
    }
    let factorial: f64 = (1..=deriv).map(|k| k as f64).product();
    let scale = factorial / h.powi(deriv as i32);
    let mut w = vec![0.0; n];
    for (zi, qi) in z.iter().zip(&q) {
        for (wk, qk) in w.iter_mut().zip(qi) {
            *wk += zi * qk;
        }
    }
    w.iter_mut().for_each(|a| *a *= scale);
    Some(w)
}

/// Convolution coefficients for the central point of a uniform, unit-spaced window, in the
/// order i = −m … +m (so the estimate at j is Σ_i C_i y_{j+i}). Includes the k! factor; divide
/// by Δx^k for a spacing Δx.
pub fn coefficients(spec: SavgolSpec) -> Result<Vec<f64>> {
    spec.validate()?;
    let m = spec.half_width() as f64;
    let xs: Vec<f64> = (0..spec.window).map(|i| i as f64 - m).collect();
    fit_weights(&xs, 0.0, spec.order, spec.deriv)
        .ok_or_else(|| Error::invalid("Savitzky–Golay filter", "the window cannot be fitted"))
}

/// Precomputed weights for every position along one axis.
struct Stencil {
    window: usize,
    /// First index of the window used for each output position.
    starts: Vec<usize>,
    /// `window` weights per position, concatenated.
    weights: Vec<f64>,
    /// Interior weights shared by every position m ≤ j < L − m (uniform axes only).
    shared: Option<Vec<f64>>,
}

impl Stencil {
    fn new(coords: &[f64], spec: SavgolSpec) -> Result<Stencil> {
        spec.validate()?;
        let len = coords.len();
        let w = spec.window;
        if w > len {
            return Err(Error::invalid(
                "Savitzky–Golay window",
                format!("{w} points is longer than the axis ({len} points)"),
            ));
        }
        if let Some(i) = coords
            .windows(2)
            .position(|p| p[1] <= p[0] || !p[0].is_finite() || !p[1].is_finite())
        {
            return Err(Error::invalid(
                "Savitzky–Golay coordinates",
                format!(
                    "must be finite and strictly increasing (position {})",
                    i + 1
                ),
            ));
        }
        let m = spec.half_width();
        let steps: Vec<f64> = coords.windows(2).map(|p| p[1] - p[0]).collect();
        let step = if steps.is_empty() {
            1.0
        } else {
            let mut s = steps.clone();
            let mid = s.len() / 2;
            *s.select_nth_unstable_by(mid, |a, b| a.total_cmp(b)).1
        };
        let uniform = steps
            .iter()
            .all(|&d| (d - step).abs() <= UNIFORM_REL_TOL * step);
        let fail = || Error::invalid("Savitzky–Golay filter", "a window could not be fitted");
        let mut starts = Vec::with_capacity(len);
        let mut weights = Vec::with_capacity(len * w);
        let mut shared = None;
        if uniform {
            let scale = step.powi(spec.deriv as i32);
            let offsets: Vec<f64> = (0..w).map(|i| i as f64).collect();
            let centre =
                fit_weights(&offsets, m as f64, spec.order, spec.deriv).ok_or_else(fail)?;
            let centre: Vec<f64> = centre.iter().map(|c| c / scale).collect();
            for j in 0..len {
                let start = j.saturating_sub(m).min(len - w);
                starts.push(start);
                if start + m == j {
                    weights.extend_from_slice(&centre);
                } else {
                    let c = fit_weights(&offsets, (j - start) as f64, spec.order, spec.deriv)
                        .ok_or_else(fail)?;
                    weights.extend(c.iter().map(|c| c / scale));
                }
            }
            shared = Some(centre);
        } else {
            for j in 0..len {
                let start = j.saturating_sub(m).min(len - w);
                starts.push(start);
                let c = fit_weights(&coords[start..start + w], coords[j], spec.order, spec.deriv)
                    .ok_or_else(fail)?;
                weights.extend(c);
            }
        }
        Ok(Stencil {
            window: w,
            starts,
            weights,
            shared,
        })
    }

    fn weights_at(&self, j: usize) -> &[f64] {
        &self.weights[j * self.window..(j + 1) * self.window]
    }
}

/// The NaN-aware fallback at position `j`: fit only the finite points of the window.
fn refit(
    values: impl Iterator<Item = f64>,
    coords: &[f64],
    start: usize,
    j: usize,
    spec: SavgolSpec,
) -> f64 {
    let mut xs = Vec::with_capacity(spec.window);
    let mut ys = Vec::with_capacity(spec.window);
    for (k, v) in values.enumerate() {
        if v.is_finite() {
            xs.push(coords[start + k]);
            ys.push(v);
        }
    }
    match fit_weights(&xs, coords[j], spec.order, spec.deriv) {
        Some(w) => w.iter().zip(&ys).map(|(a, b)| a * b).sum(),
        None => f64::NAN,
    }
}

/// Filter one row (a contiguous lane) into `out`.
fn filter_lane(lane: &[f64], out: &mut [f64], st: &Stencil, coords: &[f64], spec: SavgolSpec) {
    let len = lane.len();
    let w = st.window;
    let m = spec.half_width();
    match &st.shared {
        Some(c) if len >= w => {
            // Interior: a vectorisable convolution; edges by their own weights.
            out.iter_mut().for_each(|o| *o = 0.0);
            let hi = len - m;
            for (k, &ck) in c.iter().enumerate() {
                let src = &lane[k..k + (hi - m)];
                for (o, &s) in out[m..hi].iter_mut().zip(src) {
                    *o += ck * s;
                }
            }
            for j in (0..m).chain(hi..len) {
                let s = st.starts[j];
                out[j] = st
                    .weights_at(j)
                    .iter()
                    .zip(&lane[s..s + w])
                    .map(|(a, b)| a * b)
                    .sum();
            }
        }
        _ => {
            for (j, o) in out.iter_mut().enumerate() {
                let s = st.starts[j];
                *o = st
                    .weights_at(j)
                    .iter()
                    .zip(&lane[s..s + w])
                    .map(|(a, b)| a * b)
                    .sum();
            }
        }
    }
    for j in 0..len {
        if !out[j].is_finite() {
            out[j] = if lane[j].is_finite() {
                let s = st.starts[j];
                refit(lane[s..s + w].iter().copied(), coords, s, j, spec)
            } else {
                f64::NAN
            };
        }
    }
}

/// Savitzky–Golay filter of a 1D series `values` on strictly increasing `coords` (SI).
pub fn savgol_1d(values: &[f64], coords: &[f64], spec: SavgolSpec) -> Result<Vec<f64>> {
    if values.len() != coords.len() {
        return Err(Error::invalid(
            "Savitzky–Golay input",
            format!("{} values but {} coordinates", values.len(), coords.len()),
        ));
    }
    let st = Stencil::new(coords, spec)?;
    let mut out = vec![0.0; values.len()];
    filter_lane(values, &mut out, &st, coords, spec);
    Ok(out)
}

/// Savitzky–Golay filter of `data` along `along`, whose coordinates are `coords` (SI, strictly
/// increasing; length = number of columns for [`Along::X`], rows for [`Along::Y`]).
pub fn savgol_2d(
    data: ArrayView2<f64>,
    coords: &[f64],
    along: Along,
    spec: SavgolSpec,
) -> Result<Array2<f64>> {
    let mut out = Array2::<f64>::zeros(data.dim());
    savgol_2d_into(data, coords, along, spec, &mut out)?;
    Ok(out)
}

/// As [`savgol_2d`], writing into an existing array of the same shape as `data` (lets a caller
/// that recomputes often, such as the viewer, reuse its buffer).
pub fn savgol_2d_into(
    data: ArrayView2<f64>,
    coords: &[f64],
    along: Along,
    spec: SavgolSpec,
    out: &mut Array2<f64>,
) -> Result<()> {
    let (rows, cols) = data.dim();
    if out.dim() != (rows, cols) {
        return Err(Error::invalid(
            "Savitzky–Golay output",
            format!("has shape {:?}, the input {:?}", out.dim(), (rows, cols)),
        ));
    }
    let lane_len = match along {
        Along::X => cols,
        Along::Y => rows,
    };
    if coords.len() != lane_len {
        return Err(Error::invalid(
            "Savitzky–Golay input",
            format!(
                "{} coordinates for an axis of {lane_len} points",
                coords.len()
            ),
        ));
    }
    let st = Stencil::new(coords, spec)?;
    match along {
        Along::X => {
            Zip::from(out.rows_mut())
                .and(data.rows())
                .par_for_each(|mut o, lane| {
                    let owned;
                    let lane_slice = match lane.as_slice() {
                        Some(s) => s,
                        None => {
                            owned = lane.to_vec();
                            &owned
                        }
                    };
                    match o.as_slice_mut() {
                        Some(os) => filter_lane(lane_slice, os, &st, coords, spec),
                        None => {
                            let mut tmp = vec![0.0; lane_slice.len()];
                            filter_lane(lane_slice, &mut tmp, &st, coords, spec);
                            o.iter_mut().zip(tmp).for_each(|(a, b)| *a = b);
                        }
                    }
                });
        }
        Along::Y => {
            let w = st.window;
            out.axis_iter_mut(NdAxis(0))
                .into_par_iter()
                .enumerate()
                .for_each(|(j, mut o)| {
                    let s = st.starts[j];
                    o.fill(0.0);
                    for (k, &wk) in st.weights_at(j).iter().enumerate() {
                        o.scaled_add(wk, &data.row(s + k));
                    }
                    for c in 0..cols {
                        if !o[c].is_finite() {
                            o[c] = if data[[j, c]].is_finite() {
                                refit((s..s + w).map(|r| data[[r, c]]), coords, s, j, spec)
                            } else {
                                f64::NAN
                            };
                        }
                    }
                });
        }
    }
    Ok(())
}

/// Superscript for a small power, used in derivative units.
fn superscript(k: usize) -> String {
    const D: [char; 10] = ['⁰', '¹', '²', '³', '⁴', '⁵', '⁶', '⁷', '⁸', '⁹'];
    if k == 1 {
        return String::new();
    }
    k.to_string()
        .chars()
        .map(|c| D[c.to_digit(10).unwrap_or(0) as usize])
        .collect()
}

/// Savitzky–Golay filter of the map channel `name` along the map's `along` axis. The result is
/// named `<name>_sg<deriv>`, of kind `Other` for derivatives (unit `<unit>/<axis unit>^k`) and of
/// the input kind for smoothing.
pub fn savgol_channel(map: &Map, name: &str, along: Along, spec: SavgolSpec) -> Result<Channel> {
    let ch = map.require_named(name)?;
    let axis = match along {
        Along::X => map.x(),
        Along::Y => map.y(),
    };
    let data = savgol_2d(ch.data.view(), axis.values(), along, spec)?;
    let (kind, unit) = if spec.deriv == 0 {
        (ch.kind, ch.unit.clone())
    } else {
        (
            ChannelKind::Other,
            format!("{}/{}{}", ch.unit, axis.unit, superscript(spec.deriv)),
        )
    };
    Ok(Channel {
        name: format!("{name}_sg{}", spec.deriv),
        kind,
        unit,
        data,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn spec_validation_names_the_problem() {
        assert!(SavgolSpec::new(4, 2, 0)
            .unwrap_err()
            .to_string()
            .contains("odd"));
        assert!(SavgolSpec::new(5, 5, 0).is_err());
        assert!(SavgolSpec::new(5, 2, 3).is_err());
        assert!(SavgolSpec::new(5, 2, 2).is_ok());
        let spec = SavgolSpec::new(7, 2, 0).unwrap();
        assert!(savgol_1d(&[1.0; 5], &[0.0, 1.0, 2.0, 3.0, 4.0], spec).is_err());
        assert!(savgol_1d(&[1.0; 3], &[0.0, 1.0], spec).is_err());
    }

    #[test]
    fn five_point_quadratic_smoothing_table() {
        // (−3, 12, 17, 12, −3)/35 (Savitzky & Golay 1964 table; check-values §9).
        let c = coefficients(SavgolSpec::new(5, 2, 0).unwrap()).unwrap();
        for (a, b) in c.iter().zip([-3.0, 12.0, 17.0, 12.0, -3.0]) {
            assert!((a * 35.0 - b).abs() < 1e-12);
        }
    }

    #[test]
    fn nan_points_are_skipped_and_kept() {
        // A straight line y = 2x + 1 is reproduced by a linear fit even with holes.
        let x: Vec<f64> = (0..20).map(|i| i as f64 * 0.5).collect();
        let mut y: Vec<f64> = x.iter().map(|&v| 2.0 * v + 1.0).collect();
        y[7] = f64::NAN;
        y[8] = f64::NAN;
        let spec = SavgolSpec::new(5, 1, 1).unwrap();
        let d = savgol_1d(&y, &x, spec).unwrap();
        for (j, v) in d.iter().enumerate() {
            if j == 7 || j == 8 {
                assert!(v.is_nan());
            } else {
                assert!((v - 2.0).abs() < 1e-10, "{j}: {v}");
            }
        }
        // Too few finite points in a window gives NaN.
        let mut z = vec![f64::NAN; 9];
        z[4] = 1.0;
        let s = savgol_1d(&z, &(0..9).map(|i| i as f64).collect::<Vec<_>>(), spec).unwrap();
        assert!(s[4].is_nan());
    }

    #[test]
    fn both_directions_agree_on_a_transposed_array() {
        let xs: Vec<f64> = (0..30).map(|i| (i as f64 * 0.1).powf(1.3)).collect();
        let a = Array2::from_shape_fn((4, 30), |(r, c)| (xs[c] * (r as f64 + 1.0)).sin());
        let spec = SavgolSpec::new(7, 3, 1).unwrap();
        let dx = savgol_2d(a.view(), &xs, Along::X, spec).unwrap();
        let at = a.t().to_owned();
        let dy = savgol_2d(at.view(), &xs, Along::Y, spec).unwrap();
        for ((r, c), v) in dx.indexed_iter() {
            assert!((v - dy[[c, r]]).abs() < 1e-9);
        }
    }
}

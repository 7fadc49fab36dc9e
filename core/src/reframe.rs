//! Resampling a map from the (n, B) plane onto a regular grid in another frame.
//!
//! The (V_g, B) → (n, B) step is an exact change of axis ([`crate::transform::gate_to_density`]).
//! The filling-factor frame (ν, B) and the Wannier plane (n/n₀, φ/φ₀) are not grids of the
//! measured points: every output point (x, y) of a regular grid in the frame is mapped back to
//! (n, B) through [`Frame::from_frame`] and the value is interpolated bilinearly between the
//! four surrounding (n, B) grid points. Points outside the measured rectangle, or next to a
//! missing (NaN) value, are NaN. Densities in m⁻², fields in T.

use crate::error::{Error, Result};
use crate::line::{Frame, FramePoint, FrameRect};
use crate::map::Axis;
use ndarray::Array2;
use rayon::prelude::*;

/// A regular grid in a frame: `nx` points from `rect.x_min` to `rect.x_max` and `ny` from
/// `rect.y_min` to `rect.y_max` (frame units).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FrameGrid {
    /// The rectangle covered (frame units).
    pub rect: FrameRect,
    /// Number of columns (≥ 2).
    pub nx: usize,
    /// Number of rows (≥ 2).
    pub ny: usize,
}

impl FrameGrid {
    /// A grid with at least two points each way over a valid rectangle.
    pub fn new(rect: FrameRect, nx: usize, ny: usize) -> Result<FrameGrid> {
        if nx < 2 || ny < 2 {
            return Err(Error::invalid(
                "frame grid",
                format!("needs at least 2 × 2 points, got {nx} × {ny}"),
            ));
        }
        let rect = FrameRect::new(rect.x_min, rect.x_max, rect.y_min, rect.y_max)?;
        Ok(FrameGrid { rect, nx, ny })
    }

    /// Column coordinates, increasing (frame units).
    pub fn xs(&self) -> Vec<f64> {
        spaced(self.rect.x_min, self.rect.x_max, self.nx)
    }

    /// Row coordinates, increasing (frame units).
    pub fn ys(&self) -> Vec<f64> {
        spaced(self.rect.y_min, self.rect.y_max, self.ny)
    }
}

fn spaced(a: f64, b: f64, n: usize) -> Vec<f64> {
    (0..n)
        .map(|i| a + (b - a) * i as f64 / (n - 1) as f64)
        .collect()
}

/// Bilinear value at fractional indices (fi along x/columns, fr along y/rows); NaN when any of
/// the four neighbours that carry weight is NaN.
fn bilinear(data: &Array2<f64>, fr: f64, fi: f64) -> f64 {
    let (rows, cols) = data.dim();
    let r0 = (fr.floor() as usize).min(rows - 1);
    let c0 = (fi.floor() as usize).min(cols - 1);
    let r1 = (r0 + 1).min(rows - 1);
    let c1 = (c0 + 1).min(cols - 1);
    let (tr, tc) = (fr - r0 as f64, fi - c0 as f64);
    let mut acc = 0.0;
    for (r, wr) in [(r0, 1.0 - tr), (r1, tr)] {
        for (c, wc) in [(c0, 1.0 - tc), (c1, tc)] {
            let w = wr * wc;
            if w > 0.0 {
                acc += w * data[[r, c]];
            }
        }
    }
    acc
}

/// Resample `data` (rows along `b`, columns along `n`, an (n, B) map) onto `grid` in `frame`.
///
/// `n` must be a `Density` axis (m⁻²) and `b` a `Field` axis (T) of the map the data belongs
/// to; the result has shape (grid.ny, grid.nx), rows along the frame's y. Errors when the
/// shapes disagree or the frame needs an n₀ it lacks; never panics on data.
pub fn resample(
    n: &Axis,
    b: &Axis,
    data: &Array2<f64>,
    frame: &Frame,
    grid: &FrameGrid,
) -> Result<Array2<f64>> {
    if data.dim() != (b.len(), n.len()) {
        return Err(Error::invalid(
            "resampling",
            format!(
                "data is {:?} (rows × columns) but the axes give {} × {}",
                data.dim(),
                b.len(),
                n.len()
            ),
        ));
    }
    if n.len() < 2 || b.len() < 2 {
        return Err(Error::invalid(
            "resampling",
            "the (n, B) map needs at least 2 × 2 points",
        ));
    }
    let xs = grid.xs();
    let ys = grid.ys();
    // Validate the frame once (e.g. a missing n₀) so that the loop below only meets data.
    frame.from_frame(FramePoint { x: xs[0], y: ys[0] })?;
    let rows: Vec<Vec<f64>> = ys
        .par_iter()
        .map(|&y| {
            xs.iter()
                .map(|&x| match frame.from_frame(FramePoint { x, y }) {
                    Ok((nv, bv)) => match (n.fractional_index(nv), b.fractional_index(bv)) {
                        (Some(fi), Some(fr)) => bilinear(data, fr, fi),
                        _ => f64::NAN,
                    },
                    Err(_) => f64::NAN,
                })
                .collect()
        })
        .collect();
    let mut out = Array2::from_elem((grid.ny, grid.nx), f64::NAN);
    for (i, row) in rows.into_iter().enumerate() {
        for (j, v) in row.into_iter().enumerate() {
            out[[i, j]] = v;
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::constants::{E_OVER_H, FLUX_QUANTUM_H_OVER_E};
    use crate::map::Quantity;

    const N0: f64 = 2.0e16;

    /// A field linear in n and B is reproduced exactly by bilinear interpolation.
    fn linear_map() -> (Axis, Axis, Array2<f64>, impl Fn(f64, f64) -> f64) {
        let n = Axis::uniform("n", Quantity::Density, -4.0e16, 1.0e15, 81).unwrap();
        let b = Axis::uniform("b", Quantity::Field, 0.0, 0.25, 41).unwrap();
        let f = |nv: f64, bv: f64| 3.0 + nv / 1e16 - 0.7 * bv;
        let data =
            Array2::from_shape_fn((b.len(), n.len()), |(i, j)| f(n.values()[j], b.values()[i]));
        (n, b, data, f)
    }

    #[test]
    fn filling_frame_values_follow_nu_equals_nh_over_eb() {
        let (n, b, data, f) = linear_map();
        let frame = Frame::filling_field(None).unwrap();
        let grid = FrameGrid::new(FrameRect::new(-20.0, 20.0, 1.0, 10.0).unwrap(), 41, 19).unwrap();
        let out = resample(&n, &b, &data, &frame, &grid).unwrap();
        assert_eq!(out.dim(), (19, 41));
        let (xs, ys) = (grid.xs(), grid.ys());
        let mut inside = 0;
        for (i, &bv) in ys.iter().enumerate() {
            for (j, &nu) in xs.iter().enumerate() {
                // ν = n h/(e B) ⇒ n = ν (e/h) B (definition of the filling factor).
                let nv = nu * E_OVER_H * bv;
                let v = out[[i, j]];
                if nv.abs() <= 4.0e16 {
                    inside += 1;
                    assert!((v - f(nv, bv)).abs() < 1e-9, "ν={nu} B={bv}: {v}");
                } else {
                    assert!(v.is_nan(), "outside the measured densities must be NaN");
                }
            }
        }
        assert!(inside > 100);
    }

    #[test]
    fn wannier_plane_scales_both_axes_by_n0() {
        let (n, b, data, f) = linear_map();
        let frame = Frame::wannier(N0).unwrap();
        // φ/φ₀ = B/(φ₀ n₀) with φ₀ = h/e = 4.135 667 696e-15 T m² (exact SI): 10 T at
        // n₀ = 2e16 m⁻² is φ/φ₀ = 10/82.713 = 0.120 900.
        let y_max = 10.0 / (FLUX_QUANTUM_H_OVER_E * N0);
        assert!((y_max - 0.120_900).abs() < 1e-6, "{y_max}");
        let grid = FrameGrid::new(FrameRect::new(-2.0, 2.0, 0.0, y_max).unwrap(), 9, 5).unwrap();
        let out = resample(&n, &b, &data, &frame, &grid).unwrap();
        for (i, &y) in grid.ys().iter().enumerate() {
            for (j, &x) in grid.xs().iter().enumerate() {
                let want = f(x * N0, y * FLUX_QUANTUM_H_OVER_E * N0);
                assert!((out[[i, j]] - want).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn nan_neighbours_and_bad_inputs() {
        let (n, b, mut data, _) = linear_map();
        data[[20, 40]] = f64::NAN;
        let frame = Frame::density_field(None).unwrap();
        // A grid point exactly on the NaN sample and one far from it.
        let grid =
            FrameGrid::new(FrameRect::new(-4.0e16, 4.0e16, 0.0, 10.0).unwrap(), 81, 41).unwrap();
        let out = resample(&n, &b, &data, &frame, &grid).unwrap();
        assert!(out[[20, 40]].is_nan());
        assert!(out[[0, 0]].is_finite());
        assert_eq!(out.iter().filter(|v| v.is_nan()).count(), 1);
        // Wrong shape and a Wannier frame without n₀ are errors, not panics.
        let small = Array2::zeros((3, 3));
        assert!(resample(&n, &b, &small, &frame, &grid).is_err());
        let no_n0 = Frame {
            axes: crate::line::FrameAxes::Wannier,
            n0_m2: None,
        };
        assert!(resample(&n, &b, &data, &no_n0, &grid).is_err());
        assert!(FrameGrid::new(grid.rect, 1, 5).is_err());
    }
}

//! Resampling maps onto physical axes.
//!
//! * One gate: the `Gate` axis (V) becomes a `Density` axis (m⁻²) through n = α(V_g − V_CNP).
//!   This is an exact change of coordinates, no interpolation. If α < 0 the axis and every
//!   channel are reversed along it so that the axis stays increasing.
//! * Two gates: a map over `TopGate` × `BottomGate` is resampled onto a regular
//!   (n, D/ε₀) grid by bilinear interpolation in the gate plane. The measured rectangle of
//!   gate voltages is a parallelogram in (n, D); grid points outside it are NaN.

use crate::constants::{ELEMENTARY_CHARGE, EPSILON_0};
use crate::error::{Error, Result};
use crate::gate::{DualGate, SingleGate};
use crate::map::{Axis, Channel, Map, Quantity, SweepDirection};
use ndarray::{s, Array2, Axis as NdAxis};
use rayon::prelude::*;

/// The map with its single-gate axis replaced by carrier density n = α(V_g − V_CNP) in m⁻².
/// Errors if the map has no `Gate` axis or the gate model is not finite and non-zero.
pub fn gate_to_density(map: &Map, gate: &SingleGate) -> Result<Map> {
    let alpha = gate.alpha_m2_per_v;
    if !(alpha.is_finite() && alpha != 0.0 && gate.v_cnp.is_finite()) {
        return Err(Error::invalid(
            "gate model",
            format!(
                "needs a finite non-zero lever arm and a finite V_CNP (α = {alpha} m⁻²/V, V_CNP = {} V)",
                gate.v_cnp
            ),
        ));
    }
    let (which, axis) = map.require_axis(
        Quantity::Gate,
        "density from one gate needs a gate-voltage axis",
    )?;
    let mut n: Vec<f64> = axis.values().iter().map(|&v| gate.density(v)).collect();
    let reverse = alpha < 0.0;
    if reverse {
        n.reverse();
    }
    let density = Axis::new("n", Quantity::Density, n)?;
    let (x, y, channels, mut meta, raw) = map.clone().into_parts();
    let (x, y) = match which {
        'x' => (density, y),
        _ => (x, density),
    };
    let mut out = Map::new(x, y);
    for ch in channels {
        let data = match (reverse, which) {
            (false, _) => ch.data,
            (true, 'x') => ch.data.slice(s![.., ..;-1]).to_owned(),
            (true, _) => ch.data.slice(s![..;-1, ..]).to_owned(),
        };
        out.add_channel(Channel { data, ..ch })?;
    }
    if reverse {
        match which {
            // Rows are swept along x: each sweep now runs the other way in n.
            'x' => meta.row_directions.iter_mut().for_each(|d| {
                *d = match *d {
                    SweepDirection::Up => SweepDirection::Down,
                    SweepDirection::Down => SweepDirection::Up,
                    SweepDirection::Unknown => SweepDirection::Unknown,
                }
            }),
            _ => meta.row_directions.reverse(),
        }
    }
    meta.notes.push(format!(
        "axis {which}: gate voltage converted to density with α = {alpha:e} m⁻²/V, V_CNP = {} V{}",
        gate.v_cnp,
        if reverse { " (reversed, α < 0)" } else { "" }
    ));
    out.meta = meta;
    out.raw = raw;
    Ok(out)
}

/// Size of the regular (n, D/ε₀) grid; `None` picks a size matching the input's resolution.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
pub struct DensityDisplacementGrid {
    /// Number of density points (≥ 2), or `None` for automatic.
    pub n_points: Option<usize>,
    /// Number of displacement points (≥ 2), or `None` for automatic.
    pub d_points: Option<usize>,
}

/// Fractional index with a tolerance of 10⁻⁹ of the end spacing at the ends (round-off at the
/// parallelogram's edges must not drop a measured point).
fn frac_index(axis: &Axis, v: f64) -> Option<f64> {
    if let Some(f) = axis.fractional_index(v) {
        return Some(f);
    }
    let vals = axis.values();
    let n = vals.len();
    if n < 2 || !v.is_finite() {
        return None;
    }
    let tol_lo = 1e-9 * (vals[1] - vals[0]);
    let tol_hi = 1e-9 * (vals[n - 1] - vals[n - 2]);
    if v < vals[0] && v >= vals[0] - tol_lo {
        Some(0.0)
    } else if v > vals[n - 1] && v <= vals[n - 1] + tol_hi {
        Some((n - 1) as f64)
    } else {
        None
    }
}

/// Bilinear value of `data` (rows along `ry`, columns along `cx`) at fractional indices; NaN
/// if any point with non-zero weight is NaN.
fn bilinear(data: &Array2<f64>, fr: f64, fc: f64) -> f64 {
    let (rows, cols) = data.dim();
    let r0 = (fr.floor() as usize).min(rows.saturating_sub(2));
    let c0 = (fc.floor() as usize).min(cols.saturating_sub(2));
    let tr = fr - r0 as f64;
    let tc = fc - c0 as f64;
    let mut acc = 0.0;
    for (dr, wr) in [(0usize, 1.0 - tr), (1, tr)] {
        if wr == 0.0 || r0 + dr >= rows {
            continue;
        }
        for (dc, wc) in [(0usize, 1.0 - tc), (1, tc)] {
            if wc == 0.0 || c0 + dc >= cols {
                continue;
            }
            acc += wr * wc * data[[r0 + dr, c0 + dc]];
        }
    }
    acc
}

/// Resample a map over top- and bottom-gate voltage onto a regular grid of density n (m⁻², the
/// `x` axis) and displacement field D/ε₀ (V/m, the `y` axis) with `gate` (see
/// [`DualGate`] for the sign convention). Bilinear in the gate plane; NaN outside the measured
/// parallelogram. Automatic sizes resolve the finer of the two gate steps in n and in D (capped
/// at four times the larger input dimension).
pub fn gates_to_density_displacement(
    map: &Map,
    gate: &DualGate,
    grid: &DensityDisplacementGrid,
) -> Result<Map> {
    gate.validate()?;
    let (top_is_x, vt_axis, vb_axis) = match (map.x().quantity, map.y().quantity) {
        (Quantity::TopGate, Quantity::BottomGate) => (true, map.x(), map.y()),
        (Quantity::BottomGate, Quantity::TopGate) => (false, map.y(), map.x()),
        (qx, qy) => {
            return Err(Error::MapRequirement(format!(
                "(n, D) resampling needs a top-gate and a bottom-gate axis; the map has `{}` ({qx:?}) and `{}` ({qy:?})",
                map.x().name,
                map.y().name
            )))
        }
    };
    for a in [vt_axis, vb_axis] {
        if a.len() < 2 {
            return Err(Error::BadAxis {
                context: "(n, D) resampling".into(),
                axis: a.name.clone(),
                message: "needs at least two gate voltages".into(),
            });
        }
    }
    let corners = [
        (vt_axis.min(), vb_axis.min()),
        (vt_axis.min(), vb_axis.max()),
        (vt_axis.max(), vb_axis.min()),
        (vt_axis.max(), vb_axis.max()),
    ];
    let (mut n_lo, mut n_hi, mut d_lo, mut d_hi) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &(vt, vb) in &corners {
        let (n, d) = gate.density_displacement(vt, vb);
        n_lo = n_lo.min(n);
        n_hi = n_hi.max(n);
        d_lo = d_lo.min(d);
        d_hi = d_hi.max(d);
    }
    let dvt = vt_axis.median_step();
    let dvb = vb_axis.median_step();
    let (ct, cb) = (gate.c_top_f_per_m2, gate.c_bottom_f_per_m2);
    let cap = 4 * vt_axis.len().max(vb_axis.len());
    let auto = |range: f64, step: f64| -> usize {
        ((range / step).round() as usize + 1).clamp(2, cap.max(2))
    };
    let n_count = match grid.n_points {
        Some(k) => k,
        None => auto(n_hi - n_lo, (ct * dvt).min(cb * dvb) / ELEMENTARY_CHARGE),
    };
    let d_count = match grid.d_points {
        Some(k) => k,
        None => auto(d_hi - d_lo, (ct * dvt).min(cb * dvb) / (2.0 * EPSILON_0)),
    };
    if n_count < 2 || d_count < 2 {
        return Err(Error::invalid(
            "(n, D) grid size",
            format!("needs at least 2 points per axis, got {n_count} × {d_count}"),
        ));
    }
    let n_axis = Axis::uniform(
        "n",
        Quantity::Density,
        n_lo,
        (n_hi - n_lo) / (n_count - 1) as f64,
        n_count,
    )?;
    let d_axis = Axis::uniform(
        "D/ε₀",
        Quantity::Displacement,
        d_lo,
        (d_hi - d_lo) / (d_count - 1) as f64,
        d_count,
    )?;
    // Fractional gate indices of every output point, shared by all channels.
    let mut idx = Array2::<(f64, f64)>::from_elem((d_count, n_count), (f64::NAN, f64::NAN));
    idx.axis_iter_mut(NdAxis(0))
        .into_par_iter()
        .enumerate()
        .for_each(|(r, mut row)| {
            let d = d_axis.values()[r];
            for (c, cell) in row.iter_mut().enumerate() {
                let (vt, vb) = gate.gates_for(n_axis.values()[c], d);
                if let (Some(ft), Some(fb)) = (frac_index(vt_axis, vt), frac_index(vb_axis, vb)) {
                    // (row index, column index) into the source data.
                    *cell = if top_is_x { (fb, ft) } else { (ft, fb) };
                }
            }
        });
    let mut out = Map::new(n_axis, d_axis);
    for ch in map.channels() {
        let mut data = Array2::<f64>::from_elem((d_count, n_count), f64::NAN);
        data.axis_iter_mut(NdAxis(0))
            .into_par_iter()
            .zip(idx.axis_iter(NdAxis(0)).into_par_iter())
            .for_each(|(mut row, irow)| {
                for (v, &(fr, fc)) in row.iter_mut().zip(irow.iter()) {
                    if fr.is_finite() {
                        *v = bilinear(&ch.data, fr, fc);
                    }
                }
            });
        out.add_channel(Channel {
            name: ch.name.clone(),
            kind: ch.kind,
            unit: ch.unit.clone(),
            data,
        })?;
    }
    let mut meta = map.meta.clone();
    meta.row_directions = vec![SweepDirection::Unknown; d_count];
    meta.notes.push(format!(
        "resampled from (V_t, V_b) onto a {n_count} × {d_count} (n, D/ε₀) grid, bilinear, NaN outside the measured gate range"
    ));
    out.meta = meta;
    out.raw = map.raw.clone();
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::map::ChannelKind;

    fn gate_map() -> Map {
        let x = Axis::uniform("vg", Quantity::Gate, -1.0, 0.5, 5).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 0.0, 1.0, 2).unwrap();
        let mut m = Map::new(x, y);
        let d = Array2::from_shape_fn((2, 5), |(r, c)| (10 * r + c) as f64);
        m.add_channel(Channel::new("rxx", ChannelKind::Rxx, d))
            .unwrap();
        m
    }

    #[test]
    fn negative_lever_arm_reverses_columns() {
        let m = gate_map();
        let g = SingleGate {
            alpha_m2_per_v: -2e15,
            v_cnp: 0.0,
        };
        let out = gate_to_density(&m, &g).unwrap();
        assert_eq!(out.x().quantity, Quantity::Density);
        assert_eq!(out.x().values()[0], -2e15);
        // The column at n = −2e15 m⁻² is the one measured at V_g = +1 V (last column).
        assert_eq!(out.channel("rxx").unwrap().data[[1, 0]], 14.0);
        let e = gate_to_density(&out, &g).unwrap_err().to_string();
        assert!(e.contains("gate-voltage axis"), "{e}");
    }

    #[test]
    fn dual_gate_linear_data_is_reproduced_inside_and_nan_outside() {
        // A channel linear in (V_t, V_b) is reproduced exactly by bilinear interpolation.
        let vt = Axis::uniform("vt", Quantity::TopGate, -1.0, 0.1, 21).unwrap();
        let vb = Axis::uniform("vb", Quantity::BottomGate, -10.0, 1.0, 21).unwrap();
        let mut m = Map::new(vt.clone(), vb.clone());
        let f = |t: f64, b: f64| 3.0 * t - 0.2 * b + 1.0;
        let d = Array2::from_shape_fn((21, 21), |(r, c)| f(vt.values()[c], vb.values()[r]));
        m.add_channel(Channel::new("rxx", ChannelKind::Rxx, d))
            .unwrap();
        let g = DualGate::new(1.0e-3, 1.2e-4).unwrap();
        let out =
            gates_to_density_displacement(&m, &g, &DensityDisplacementGrid::default()).unwrap();
        let ch = &out.channel("rxx").unwrap().data;
        let (mut inside, mut outside) = (0, 0);
        for ((r, c), v) in ch.indexed_iter() {
            let (t, b) = g.gates_for(out.x().values()[c], out.y().values()[r]);
            let within = (-1.0 - 1e-9..=1.0 + 1e-9).contains(&t)
                && (-10.0 - 1e-9..=10.0 + 1e-9).contains(&b);
            if within {
                inside += 1;
                assert!((v - f(t, b)).abs() < 1e-9, "{v} vs {}", f(t, b));
            } else {
                outside += 1;
                assert!(v.is_nan());
            }
        }
        assert!(inside > 100 && outside > 100, "{inside} {outside}");
        assert_eq!(out.y().quantity, Quantity::Displacement);
        // A two-gate map has no single-gate axis to convert.
        let corner = gate_to_density(
            &m,
            &SingleGate {
                alpha_m2_per_v: 1.0,
                v_cnp: 0.0,
            },
        );
        assert!(corner.is_err());
    }
}

//! Dual-gate maps at fixed field: line cuts of an (n, D/ε₀) map and the constant-filling lines
//! at the map's field, in (n, D) and in the gate plane.
//!
//! Resampling from (V_t, V_b) to (n, D/ε₀) is [`crate::transform::gates_to_density_displacement`];
//! the sign convention of D is that of [`DualGate`].

use crate::constants::E_OVER_H;
use crate::error::{Error, Result};
use crate::gate::DualGate;
use crate::map::{Map, Quantity};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Which coordinate a cut holds fixed.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CutAt {
    /// Fixed density n, m⁻²: the cut runs along D/ε₀.
    Density(f64),
    /// Fixed displacement D/ε₀, V/m: the cut runs along n.
    Displacement(f64),
}

/// A line cut: one channel along one axis at a fixed value of the other.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LineCut {
    /// The fixed coordinate and its value (SI).
    pub at: CutAt,
    /// What the cut runs along.
    pub along: Quantity,
    /// Coordinates along the cut (SI: m⁻² or V/m).
    pub coordinate: Vec<f64>,
    /// Channel values, linearly interpolated between the two neighbouring grid lines (NaN
    /// outside the measured parallelogram).
    pub values: Vec<f64>,
    /// Channel name.
    pub channel: String,
}

/// Cut `channel` of an (n, D/ε₀) map at fixed density or displacement, interpolating linearly
/// between the two nearest grid lines.
pub fn line_cut(map: &Map, channel: &str, at: CutAt) -> Result<LineCut> {
    let ch = map.require_named(channel)?;
    let (fixed_q, v) = match at {
        CutAt::Density(n) => (Quantity::Density, n),
        CutAt::Displacement(d) => (Quantity::Displacement, d),
    };
    let along_q = if fixed_q == Quantity::Density {
        Quantity::Displacement
    } else {
        Quantity::Density
    };
    let (fw, faxis) = map.axis_of(fixed_q).ok_or_else(|| {
        Error::MapRequirement(format!(
            "a line cut at fixed {} needs an (n, D/ε₀) map; the axes are `{}` and `{}`",
            fixed_q.symbol(),
            map.x().name,
            map.y().name
        ))
    })?;
    let (_, aaxis) = map.axis_of(along_q).ok_or_else(|| {
        Error::MapRequirement(format!(
            "a line cut needs both n and D/ε₀ axes; the axes are `{}` and `{}`",
            map.x().name,
            map.y().name
        ))
    })?;
    let f = faxis.fractional_index(v).ok_or_else(|| {
        let (unit, scale) = fixed_q.display_unit();
        Error::invalid(
            "line cut",
            format!(
                "{} = {} {unit} is outside the map's range {}…{} {unit}",
                fixed_q.symbol(),
                v / scale,
                faxis.min() / scale,
                faxis.max() / scale
            ),
        )
    })?;
    let len = faxis.len();
    let i0 = (f.floor() as usize).min(len.saturating_sub(2));
    let w = if len > 1 { f - i0 as f64 } else { 0.0 };
    let pick = |i: usize, j: usize| -> f64 {
        if fw == 'x' {
            ch.data[[j, i]]
        } else {
            ch.data[[i, j]]
        }
    };
    let values = (0..aaxis.len())
        .map(|j| {
            if len == 1 {
                pick(0, j)
            } else if w == 0.0 {
                pick(i0, j)
            } else if w == 1.0 {
                pick(i0 + 1, j)
            } else {
                (1.0 - w) * pick(i0, j) + w * pick(i0 + 1, j)
            }
        })
        .collect();
    Ok(LineCut {
        at,
        along: along_q,
        coordinate: aaxis.values().to_vec(),
        values,
        channel: channel.into(),
    })
}

/// A constant-filling line at a field: vertical in (n, D), a straight segment in (V_t, V_b).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FillingLine {
    /// Filling factor ν.
    pub nu: Rational,
    /// Density n = ν(e/h)B, m⁻².
    pub density_m2: f64,
    /// Gate voltages (V_t, V_b) in V at the two ends of the displacement range given.
    pub gate_ends_v: [(f64, f64); 2],
}

/// Constant-ν lines at field `b_t` (T) for each ν, with their ends in the gate plane at the
/// displacements `d_range` (V/m, D/ε₀).
pub fn filling_lines(
    gate: &DualGate,
    nus: &[Rational],
    b_t: f64,
    d_range: (f64, f64),
) -> Result<Vec<FillingLine>> {
    gate.validate()?;
    if !b_t.is_finite() {
        return Err(Error::invalid("field", format!("{b_t} T is not finite")));
    }
    Ok(nus
        .iter()
        .map(|&nu| {
            let n = nu.to_f64() * E_OVER_H * b_t;
            FillingLine {
                nu,
                density_m2: n,
                gate_ends_v: [gate.gates_for(n, d_range.0), gate.gates_for(n, d_range.1)],
            }
        })
        .collect())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::map::{Axis, Channel, ChannelKind};
    use ndarray::Array2;

    #[test]
    fn cuts_interpolate_between_grid_lines() {
        let n = Axis::uniform("n", Quantity::Density, -1e16, 1e15, 21).unwrap();
        let d = Axis::uniform("D", Quantity::Displacement, -1e8, 1e7, 21).unwrap();
        let f = |n: f64, d: f64| 2.0 * n / 1e16 + d / 1e8;
        let data = Array2::from_shape_fn((21, 21), |(r, c)| f(n.values()[c], d.values()[r]));
        let mut m = Map::new(n, d);
        m.add_channel(Channel::new("rxx", ChannelKind::Rxx, data))
            .unwrap();
        let cut = line_cut(&m, "rxx", CutAt::Density(2.5e15)).unwrap();
        assert_eq!(cut.along, Quantity::Displacement);
        for (x, v) in cut.coordinate.iter().zip(&cut.values) {
            assert!((v - f(2.5e15, *x)).abs() < 1e-12);
        }
        let cut = line_cut(&m, "rxx", CutAt::Displacement(-3.5e7)).unwrap();
        assert!((cut.values[0] - f(-1e16, -3.5e7)).abs() < 1e-12);
        assert!(line_cut(&m, "rxx", CutAt::Density(5e16)).is_err());
        assert!(line_cut(&m, "rxy", CutAt::Density(0.0)).is_err());
    }
}

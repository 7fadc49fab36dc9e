//! Field symmetrisation of maps measured at both signs of B.
//!
//! Onsager reciprocity makes R_xx even and R_xy odd in B for a two-dimensional sample; mixing
//! from misaligned contacts adds the wrong parity, which symmetrisation removes:
//! * even channels (R_xx, σ_xx): X(B) → [X(B) + X(−B)]/2;
//! * odd channels (R_xy, σ_xy): X(B) → [X(B) − X(−B)]/2.
//!
//! The result lives on the common |B| grid: the measured B ≥ 0 values that the negative branch
//! also covers. Where the mirrored field −B was not measured exactly, the negative branch is
//! linearly interpolated between its two neighbouring negative (or zero) fields — never across
//! zero into the positive branch. NaN on either side gives NaN. Channels of kind `Other` have
//! no known parity and are left out (a note in the map says so).

use crate::error::{Error, Result};
use crate::map::{Axis, Channel, ChannelKind, Map, Quantity};
use ndarray::{Array2, ArrayView2};

/// How a channel transforms under B → −B.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Parity {
    /// X(−B) = X(B): R_xx, σ_xx.
    Even,
    /// X(−B) = −X(B): R_xy, σ_xy.
    Odd,
}

/// The field parity of a channel kind, `None` for `Other`.
pub fn parity_of(kind: ChannelKind) -> Option<Parity> {
    match kind {
        ChannelKind::Rxx | ChannelKind::SigmaXx => Some(Parity::Even),
        ChannelKind::Rxy | ChannelKind::SigmaXy => Some(Parity::Odd),
        ChannelKind::Other => None,
    }
}

/// Where −b falls on the negative branch: (lower index, weight of the upper neighbour).
fn mirror_position(neg: &[f64], b: f64) -> Option<(usize, f64)> {
    let v = -b;
    let n = neg.len();
    let tol = 1e-9
        * if n >= 2 {
            neg[n - 1] - neg[0]
        } else {
            b.abs().max(1e-12)
        };
    if v < neg[0] - tol || v > neg[n - 1] + tol {
        return None;
    }
    if n == 1 {
        return Some((0, 0.0));
    }
    let v = v.clamp(neg[0], neg[n - 1]);
    let i = neg.partition_point(|&a| a <= v).clamp(1, n - 1) - 1;
    Some((i, (v - neg[i]) / (neg[i + 1] - neg[i])))
}

/// Symmetrise `data` whose rows follow the field values `field`; returns the rows at `keep`.
fn symmetrize_rows(
    data: ArrayView2<f64>,
    keep: &[(usize, usize, f64)],
    parity: Parity,
) -> Array2<f64> {
    let cols = data.ncols();
    let mut out = Array2::<f64>::zeros((keep.len(), cols));
    let sign = match parity {
        Parity::Even => 1.0,
        Parity::Odd => -1.0,
    };
    for (o, &(pos, i, t)) in keep.iter().enumerate() {
        for c in 0..cols {
            // Zero weights are skipped so that a missing neighbour does not spoil an exact match.
            let mirrored = if t == 0.0 {
                data[[i, c]]
            } else if t == 1.0 {
                data[[i + 1, c]]
            } else {
                (1.0 - t) * data[[i, c]] + t * data[[i + 1, c]]
            };
            out[[o, c]] = 0.5 * (data[[pos, c]] + sign * mirrored);
        }
    }
    out
}

/// The field-symmetrised map on the common |B| ≥ 0 grid (see the module docs). Errors if the map
/// has no field axis, no negative or no positive fields, or the two branches do not overlap.
pub fn symmetrize_field(map: &Map) -> Result<Map> {
    let (which, axis) = map.require_axis(
        Quantity::Field,
        "field symmetrisation needs a magnetic-field axis",
    )?;
    let b = axis.values();
    let n_neg = b.partition_point(|&v| v <= 0.0);
    if b[0] >= 0.0 {
        return Err(Error::MapRequirement(format!(
            "field symmetrisation needs fields of both signs; axis `{}` has no negative fields (it spans {} T to {} T)",
            axis.name,
            axis.min(),
            axis.max()
        )));
    }
    if axis.max() <= 0.0 {
        return Err(Error::MapRequirement(format!(
            "field symmetrisation needs fields of both signs; axis `{}` has no positive fields (it spans {} T to {} T)",
            axis.name,
            axis.min(),
            axis.max()
        )));
    }
    let neg = &b[..n_neg];
    let first_nonneg = b.partition_point(|&v| v < 0.0);
    let mut keep = Vec::new();
    let mut kept_b = Vec::new();
    for (pos, &bv) in b.iter().enumerate().skip(first_nonneg) {
        if let Some((i, t)) = mirror_position(neg, bv) {
            keep.push((pos, i, t));
            kept_b.push(bv);
        }
    }
    if keep.is_empty() {
        return Err(Error::MapRequirement(format!(
            "field symmetrisation: the positive fields ({} T to {} T) and the mirrored negative fields ({} T to {} T) of axis `{}` do not overlap",
            b[first_nonneg],
            axis.max(),
            -neg[neg.len() - 1],
            -neg[0],
            axis.name
        )));
    }
    let mut new_axis = Axis::new(axis.name.clone(), Quantity::Field, kept_b)?;
    new_axis.unit = axis.unit.clone();
    let (x, y) = match which {
        'x' => (new_axis, map.y().clone()),
        _ => (map.x().clone(), new_axis),
    };
    let mut out = Map::new(x, y);
    let mut dropped = Vec::new();
    for ch in map.channels() {
        let Some(parity) = parity_of(ch.kind) else {
            dropped.push(ch.name.clone());
            continue;
        };
        let data = match which {
            'x' => symmetrize_rows(ch.data.t(), &keep, parity)
                .t()
                .as_standard_layout()
                .into_owned(),
            _ => symmetrize_rows(ch.data.view(), &keep, parity),
        };
        out.add_channel(Channel {
            name: ch.name.clone(),
            kind: ch.kind,
            unit: ch.unit.clone(),
            data,
        })?;
    }
    let mut meta = map.meta.clone();
    if which == 'y' {
        meta.row_directions = keep
            .iter()
            .map(|&(pos, _, _)| {
                map.meta
                    .row_directions
                    .get(pos)
                    .copied()
                    .unwrap_or(crate::map::SweepDirection::Unknown)
            })
            .collect();
    }
    meta.notes.push(format!(
        "field-symmetrised on {} fields ≥ 0 (even: R_xx, σ_xx; odd: R_xy, σ_xy)",
        keep.len()
    ));
    if !dropped.is_empty() {
        meta.notes.push(format!(
            "left out of the symmetrised map (no known field parity): {}",
            dropped.join(", ")
        ));
    }
    out.meta = meta;
    out.raw = map.raw.clone();
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn map_with(bvals: Vec<f64>, field_on_x: bool) -> Map {
        let g = Axis::uniform("vg", Quantity::Gate, 0.0, 1.0, 3).unwrap();
        let b = Axis::new("B", Quantity::Field, bvals).unwrap();
        let (nb, bv) = (b.len(), b.values().to_vec());
        // R_xx = 100 + 10 g + 7 B (odd admixture); R_xy = 50 B + 3 + g (even admixture).
        let rxx = Array2::from_shape_fn((nb, 3), |(r, c)| 100.0 + 10.0 * c as f64 + 7.0 * bv[r]);
        let rxy = Array2::from_shape_fn((nb, 3), |(r, c)| 50.0 * bv[r] + 3.0 + c as f64);
        let other = Array2::zeros((nb, 3));
        let mut m = if field_on_x {
            Map::new(b, g)
        } else {
            Map::new(g, b)
        };
        let fix = |a: Array2<f64>| if field_on_x { a.t().to_owned() } else { a };
        m.add_channel(Channel::new("rxx", ChannelKind::Rxx, fix(rxx)))
            .unwrap();
        m.add_channel(Channel::new("rxy", ChannelKind::Rxy, fix(rxy)))
            .unwrap();
        m.add_channel(Channel::new("t", ChannelKind::Other, fix(other)))
            .unwrap();
        m
    }

    #[test]
    fn removes_wrong_parity_on_offset_grids() {
        // Negative fields are offset by a quarter step from the positive ones.
        let mut bv: Vec<f64> = (0..9).map(|i| -4.25 + 0.5 * i as f64).collect();
        bv.extend((0..8).map(|i| 0.5 * i as f64));
        for field_on_x in [false, true] {
            let s = symmetrize_field(&map_with(bv.clone(), field_on_x)).unwrap();
            let (_, b) = s.axis_of(Quantity::Field).unwrap();
            // −b must lie in [−4.25, −0.25] or be the measured B = 0 itself.
            assert_eq!(b.values(), &[0.0, 0.5, 1.0, 1.5, 2.0, 2.5, 3.0, 3.5]);
            let rxx = &s.channel("rxx").unwrap().data;
            let rxy = &s.channel("rxy").unwrap().data;
            for (k, &bk) in b.values().iter().enumerate() {
                for g in 0..3 {
                    let idx = if field_on_x { [g, k] } else { [k, g] };
                    assert!((rxx[idx] - (100.0 + 10.0 * g as f64)).abs() < 1e-9);
                    assert!((rxy[idx] - 50.0 * bk).abs() < 1e-9);
                }
            }
            assert!(s.channel("t").is_none());
        }
    }

    #[test]
    fn clear_errors() {
        let e = symmetrize_field(&map_with(vec![0.0, 1.0, 2.0], false)).unwrap_err();
        assert!(e.to_string().contains("no negative fields"), "{e}");
        let e = symmetrize_field(&map_with(vec![-2.0, -1.0], false)).unwrap_err();
        assert!(e.to_string().contains("no positive fields"), "{e}");
        let e = symmetrize_field(&map_with(vec![-0.5, -0.2, 1.0, 2.0], false)).unwrap_err();
        assert!(e.to_string().contains("do not overlap"), "{e}");
        let x = Axis::uniform("vt", Quantity::TopGate, 0.0, 1.0, 2).unwrap();
        let y = Axis::uniform("vb", Quantity::BottomGate, 0.0, 1.0, 2).unwrap();
        let e = symmetrize_field(&Map::new(x, y)).unwrap_err();
        assert!(e.to_string().contains("magnetic-field axis"));
    }

    #[test]
    fn nan_on_one_side_gives_nan() {
        let mut m = map_with(vec![-1.0, 0.0, 1.0], false);
        let mut rxx = m.channel("rxx").unwrap().clone();
        rxx.data[[0, 1]] = f64::NAN;
        m.set_channel(rxx).unwrap();
        let s = symmetrize_field(&m).unwrap();
        let d = &s.channel("rxx").unwrap().data;
        assert!(d[[1, 1]].is_nan() && d[[1, 0]].is_finite() && d[[0, 1]].is_finite());
        // At B = 0 the odd channel vanishes.
        assert_eq!(s.channel("rxy").unwrap().data[[0, 2]], 0.0);
    }
}

//! Named derived channels of a map: transconductance, density derivatives and conductivities.
//!
//! Each [`DerivedQuantity`] has a stable short name used in files, on the command line and in
//! the viewer. Derivatives are Savitzky–Golay derivatives (see [`crate::savgol`]) along the
//! gate or density axis; because n = α(V_g − V_CNP) is linear, d/dn = (1/α) d/dV_g, so either
//! axis serves once a gate model is known.

use crate::conductivity::{conductivity_channels, SampleGeometry};
use crate::error::{Error, Result};
use crate::gate::SingleGate;
use crate::map::{Channel, ChannelKind, Map, Quantity};
use crate::savgol::{savgol_2d, Along, SavgolSpec};
use ndarray::Array2;
use serde::{Deserialize, Serialize};

/// A derived channel that can be computed from a map.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DerivedQuantity {
    /// Transconductance-like dR_xx/dV_g, in Ω/V (`drxx_dvg`).
    DrxxDvg,
    /// dR_xx/dn, in Ω m² (`drxx_dn`).
    DrxxDn,
    /// dσ_xy/dn, in S m² (`dsxy_dn`); plateaus of σ_xy show as zeros.
    DsxyDn,
    /// d²R_xx/dn², in Ω m⁴ (`d2rxx_dn2`); sharpens weak minima.
    D2rxxDn2,
    /// Longitudinal conductivity σ_xx, in S (`sxx`).
    Sxx,
    /// Hall conductivity σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²), in S (`sxy`).
    Sxy,
}

impl DerivedQuantity {
    /// Every derived quantity, in a fixed order.
    pub const ALL: [DerivedQuantity; 6] = [
        DerivedQuantity::DrxxDvg,
        DerivedQuantity::DrxxDn,
        DerivedQuantity::DsxyDn,
        DerivedQuantity::D2rxxDn2,
        DerivedQuantity::Sxx,
        DerivedQuantity::Sxy,
    ];
    /// The stable short name (also the derived channel's name).
    pub fn short_name(self) -> &'static str {
        match self {
            DerivedQuantity::DrxxDvg => "drxx_dvg",
            DerivedQuantity::DrxxDn => "drxx_dn",
            DerivedQuantity::DsxyDn => "dsxy_dn",
            DerivedQuantity::D2rxxDn2 => "d2rxx_dn2",
            DerivedQuantity::Sxx => "sxx",
            DerivedQuantity::Sxy => "sxy",
        }
    }
    /// The quantity with this short name.
    pub fn from_short_name(name: &str) -> Option<DerivedQuantity> {
        DerivedQuantity::ALL
            .into_iter()
            .find(|q| q.short_name() == name)
    }
    /// SI unit symbol of the derived values.
    pub fn unit(self) -> &'static str {
        match self {
            DerivedQuantity::DrxxDvg => "Ω/V",
            DerivedQuantity::DrxxDn => "Ω m²",
            DerivedQuantity::DsxyDn => "S m²",
            DerivedQuantity::D2rxxDn2 => "Ω m⁴",
            DerivedQuantity::Sxx | DerivedQuantity::Sxy => "S",
        }
    }
    /// A one-line description for menus and help.
    pub fn description(self) -> &'static str {
        match self {
            DerivedQuantity::DrxxDvg => "derivative of R_xx with respect to gate voltage",
            DerivedQuantity::DrxxDn => "derivative of R_xx with respect to carrier density",
            DerivedQuantity::DsxyDn => "derivative of σ_xy with respect to carrier density",
            DerivedQuantity::D2rxxDn2 => "second derivative of R_xx with respect to density",
            DerivedQuantity::Sxx => "longitudinal conductivity from the resistivity tensor",
            DerivedQuantity::Sxy => "Hall conductivity from the resistivity tensor",
        }
    }
}

/// What a derivation needs beyond the map.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DeriveOptions {
    /// Savitzky–Golay window (odd number of points).
    pub window: usize,
    /// Savitzky–Golay polynomial order (≥ the derivative order).
    pub order: usize,
    /// Gate model, needed to take density derivatives on a gate-voltage axis (or gate-voltage
    /// derivatives on a density axis).
    pub gate: Option<SingleGate>,
    /// Hall-bar geometry, needed for σ from R_xx and R_xy.
    pub geometry: Option<SampleGeometry>,
}

impl Default for DeriveOptions {
    /// Window 9, cubic (common practice for dense gate sweeps); no gate model, no geometry.
    fn default() -> Self {
        DeriveOptions {
            window: 9,
            order: 3,
            gate: None,
            geometry: None,
        }
    }
}

fn along_of(which: char) -> Along {
    if which == 'x' {
        Along::X
    } else {
        Along::Y
    }
}

fn lever_arm(opts: &DeriveOptions) -> Option<f64> {
    opts.gate
        .map(|g| g.alpha_m2_per_v)
        .filter(|a| a.is_finite() && *a != 0.0)
}

/// k-th derivative of `data` with respect to `target` (Gate or Density).
fn derivative(
    map: &Map,
    data: &Array2<f64>,
    target: Quantity,
    k: usize,
    opts: &DeriveOptions,
) -> Result<Array2<f64>> {
    let spec = SavgolSpec::new(opts.window, opts.order, k)?;
    let other = if target == Quantity::Density {
        Quantity::Gate
    } else {
        Quantity::Density
    };
    if let Some((which, axis)) = map.axis_of(target) {
        return savgol_2d(data.view(), axis.values(), along_of(which), spec);
    }
    if let (Some((which, axis)), Some(alpha)) = (map.axis_of(other), lever_arm(opts)) {
        let d = savgol_2d(data.view(), axis.values(), along_of(which), spec)?;
        // dn = α dV_g: d^k/dn^k = α^−k d^k/dV_g^k, and d^k/dV_g^k = α^k d^k/dn^k.
        let factor = if target == Quantity::Density {
            alpha.powi(-(k as i32))
        } else {
            alpha.powi(k as i32)
        };
        return Ok(d * factor);
    }
    Err(Error::MapRequirement(format!(
        "a derivative with respect to {} needs a {} axis, or a {} axis and a gate model; {}",
        target.symbol(),
        if target == Quantity::Density {
            "density"
        } else {
            "gate-voltage"
        },
        if target == Quantity::Density {
            "gate-voltage"
        } else {
            "density"
        },
        map.axes_text()
    )))
}

/// σ_xx or σ_xy of a map: from R_xx and R_xy with the geometry, or an existing σ channel.
fn sigma(map: &Map, kind: ChannelKind, opts: &DeriveOptions) -> Result<Array2<f64>> {
    let has_r =
        map.channel_of(ChannelKind::Rxx).is_some() && map.channel_of(ChannelKind::Rxy).is_some();
    if has_r {
        let geometry = opts.geometry.ok_or_else(|| {
            Error::MapRequirement(
                "σ from R_xx and R_xy needs the sample geometry (W and L, or the number of squares)"
                    .into(),
            )
        })?;
        let (sxx, sxy) = conductivity_channels(map, &geometry)?;
        return Ok(if kind == ChannelKind::SigmaXx {
            sxx.data
        } else {
            sxy.data
        });
    }
    if let Some(ch) = map.channel_of(kind) {
        return Ok(ch.data.clone());
    }
    Err(Error::MapRequirement(format!(
        "σ needs R_xx and R_xy channels (or a {kind:?} channel); channels: {}",
        map.channels()
            .iter()
            .map(|c| c.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    )))
}

/// Compute the derived channel `which` of `map`. The channel is named by
/// [`DerivedQuantity::short_name`] and carries [`DerivedQuantity::unit`].
pub fn derive(map: &Map, which: DerivedQuantity, opts: &DeriveOptions) -> Result<Channel> {
    let rxx = || map.require(ChannelKind::Rxx).map(|c| &c.data);
    let (kind, data) = match which {
        DerivedQuantity::DrxxDvg => (
            ChannelKind::Other,
            derivative(map, rxx()?, Quantity::Gate, 1, opts)?,
        ),
        DerivedQuantity::DrxxDn => (
            ChannelKind::Other,
            derivative(map, rxx()?, Quantity::Density, 1, opts)?,
        ),
        DerivedQuantity::D2rxxDn2 => (
            ChannelKind::Other,
            derivative(map, rxx()?, Quantity::Density, 2, opts)?,
        ),
        DerivedQuantity::DsxyDn => {
            let s = sigma(map, ChannelKind::SigmaXy, opts)?;
            (
                ChannelKind::Other,
                derivative(map, &s, Quantity::Density, 1, opts)?,
            )
        }
        DerivedQuantity::Sxx => (
            ChannelKind::SigmaXx,
            sigma(map, ChannelKind::SigmaXx, opts)?,
        ),
        DerivedQuantity::Sxy => (
            ChannelKind::SigmaXy,
            sigma(map, ChannelKind::SigmaXy, opts)?,
        ),
    };
    Ok(Channel {
        name: which.short_name().to_string(),
        kind,
        unit: which.unit().to_string(),
        data,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::map::Axis;

    /// R_xx = 100 + 3 V_g² on a gate axis (x), constant in B (y); R_xy = 10 V_g.
    fn map() -> Map {
        let x = Axis::uniform("vg", Quantity::Gate, -2.0, 0.1, 41).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 0.0, 1.0, 3).unwrap();
        let v = x.values().to_vec();
        let mut m = Map::new(x, y);
        m.add_channel(Channel::new(
            "rxx",
            ChannelKind::Rxx,
            Array2::from_shape_fn((3, 41), |(_, c)| 100.0 + 3.0 * v[c] * v[c]),
        ))
        .unwrap();
        m.add_channel(Channel::new(
            "rxy",
            ChannelKind::Rxy,
            Array2::from_shape_fn((3, 41), |(_, c)| 10.0 * v[c]),
        ))
        .unwrap();
        m
    }

    #[test]
    fn short_names_are_stable_and_unique() {
        let names: Vec<_> = DerivedQuantity::ALL
            .iter()
            .map(|q| q.short_name())
            .collect();
        assert_eq!(
            names,
            ["drxx_dvg", "drxx_dn", "dsxy_dn", "d2rxx_dn2", "sxx", "sxy"]
        );
        for q in DerivedQuantity::ALL {
            assert_eq!(DerivedQuantity::from_short_name(q.short_name()), Some(q));
        }
        assert_eq!(DerivedQuantity::from_short_name("rxx"), None);
    }

    #[test]
    fn gate_and_density_derivatives() {
        let m = map();
        let mut opts = DeriveOptions::default();
        let d = derive(&m, DerivedQuantity::DrxxDvg, &opts).unwrap();
        assert_eq!(d.unit, "Ω/V");
        // d/dV_g (100 + 3V²) = 6V; at column 30, V = 1.0.
        assert!((d.data[[1, 30]] - 6.0).abs() < 1e-9);
        let e = derive(&m, DerivedQuantity::DrxxDn, &opts).unwrap_err();
        assert!(e.to_string().contains("gate model"), "{e}");
        let alpha = 2.0e15;
        opts.gate = Some(SingleGate {
            alpha_m2_per_v: alpha,
            v_cnp: 0.0,
        });
        let dn = derive(&m, DerivedQuantity::DrxxDn, &opts).unwrap();
        assert!((dn.data[[0, 30]] - 6.0 / alpha).abs() < 1e-9 / alpha);
        let d2 = derive(&m, DerivedQuantity::D2rxxDn2, &opts).unwrap();
        assert!((d2.data[[2, 5]] * alpha * alpha - 6.0).abs() < 1e-8);
        // On a density axis, dR/dV_g comes back through α.
        let on_n = crate::transform::gate_to_density(&m, opts.gate.as_ref().unwrap()).unwrap();
        let dv = derive(&on_n, DerivedQuantity::DrxxDvg, &opts).unwrap();
        assert!((dv.data[[1, 30]] - 6.0).abs() < 1e-8);
    }

    #[test]
    fn sigma_needs_geometry() {
        let m = map();
        let mut opts = DeriveOptions::default();
        assert!(derive(&m, DerivedQuantity::Sxy, &opts)
            .unwrap_err()
            .to_string()
            .contains("geometry"));
        opts.geometry = Some(SampleGeometry::Squares(1.0));
        let s = derive(&m, DerivedQuantity::Sxx, &opts).unwrap();
        assert_eq!((s.kind, s.unit.as_str()), (ChannelKind::SigmaXx, "S"));
        // Column 30: ρ_xx = 103 Ω, ρ_xy = 10 Ω.
        assert!((s.data[[0, 30]] - 103.0 / (103.0f64.powi(2) + 100.0)).abs() < 1e-15);
        opts.gate = Some(SingleGate {
            alpha_m2_per_v: 1e15,
            v_cnp: 0.0,
        });
        let ds = derive(&m, DerivedQuantity::DsxyDn, &opts).unwrap();
        assert!(ds.data.iter().all(|v| v.is_finite()));
    }
}

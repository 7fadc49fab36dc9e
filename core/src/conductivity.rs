//! Resistance to resistivity to conductivity for an isotropic 2D sample.
//!
//! * ρ_xx = R_xx · W/L (Ω per square): W is the channel width, L the distance between the
//!   voltage probes; equivalently ρ_xx = R_xx / (number of squares L/W).
//! * ρ_xy = R_xy (no geometric factor in 2D).
//! * The tensor ρ = [[ρ_xx, ρ_xy], [−ρ_xy, ρ_xx]] is inverted exactly:
//!   σ_xx = ρ_xx/(ρ_xx² + ρ_xy²), **σ_xy = −ρ_xy/(ρ_xx² + ρ_xy²)**.
//!   Sign convention: σ_xy is the xy element of σ = ρ⁻¹, so a positive R_xy gives a negative
//!   σ_xy. (Quoting σ_xy = +ρ_xy/(…) instead corresponds to using ρ_yx; magnitudes agree.)
//!
//! Missing data: NaN in either input gives NaN in both outputs. A vanishing tensor
//! (ρ_xx = ρ_xy = 0) has no finite inverse; both outputs are then NaN (undefined) rather than
//! an infinity, so that it shows as "no value" instead of as a huge conductivity.

use crate::constants::E2_OVER_H;
use crate::error::{Error, Result};
use crate::map::{Channel, ChannelKind, Map};
use ndarray::{Array2, Zip};
use serde::{Deserialize, Serialize};

/// Hall-bar geometry used to turn R_xx (Ω) into ρ_xx (Ω per square).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum SampleGeometry {
    /// Channel width W and probe separation L, both in m.
    WidthLength {
        /// Channel width W in m.
        width_m: f64,
        /// Distance between the longitudinal voltage probes L in m.
        length_m: f64,
    },
    /// The number of squares L/W between the probes (dimensionless).
    Squares(f64),
}

impl SampleGeometry {
    /// Number of squares L/W; errors unless it is positive and finite.
    pub fn squares(&self) -> Result<f64> {
        let sq = match *self {
            SampleGeometry::WidthLength { width_m, length_m } => {
                if !(width_m > 0.0 && width_m.is_finite()) {
                    return Err(Error::invalid(
                        "sample width",
                        format!("must be a positive length in m, got {width_m}"),
                    ));
                }
                if !(length_m > 0.0 && length_m.is_finite()) {
                    return Err(Error::invalid(
                        "sample length",
                        format!("must be a positive length in m, got {length_m}"),
                    ));
                }
                length_m / width_m
            }
            SampleGeometry::Squares(n) => n,
        };
        if !(sq > 0.0 && sq.is_finite()) {
            return Err(Error::invalid(
                "number of squares",
                format!("must be positive and finite, got {sq}"),
            ));
        }
        Ok(sq)
    }
    /// ρ_xx (Ω per square) from R_xx (Ω).
    pub fn rho_xx(&self, r_xx: f64) -> Result<f64> {
        Ok(r_xx / self.squares()?)
    }
}

/// Invert the isotropic 2×2 tensor [[a, b], [−b, a]]: returns (a/(a²+b²), −b/(a²+b²)).
/// NaN if either input is NaN or both are zero.
fn invert_isotropic(a: f64, b: f64) -> (f64, f64) {
    let det = a * a + b * b;
    if det.is_nan() || det <= 0.0 || det.is_infinite() {
        // det is NaN (missing input), zero (no inverse) or overflowed.
        if det.is_infinite() && a.is_finite() && b.is_finite() {
            // Overflow of the squares: rescale.
            let s = a.abs().max(b.abs());
            let (a1, b1) = (a / s, b / s);
            let d1 = a1 * a1 + b1 * b1;
            return (a1 / d1 / s, -b1 / d1 / s);
        }
        return (f64::NAN, f64::NAN);
    }
    (a / det, -b / det)
}

/// (σ_xx, σ_xy) in S from (ρ_xx, ρ_xy) in Ω; σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²) (see module docs).
pub fn sigma_from_rho(rho_xx: f64, rho_xy: f64) -> (f64, f64) {
    invert_isotropic(rho_xx, rho_xy)
}

/// (ρ_xx, ρ_xy) in Ω from (σ_xx, σ_xy) in S: the same exact inverse, ρ_xy = −σ_xy/(σ_xx²+σ_xy²).
pub fn rho_from_sigma(sigma_xx: f64, sigma_xy: f64) -> (f64, f64) {
    invert_isotropic(sigma_xx, sigma_xy)
}

/// A conductivity (S) in units of e²/h.
pub fn siemens_to_e2h(sigma: f64) -> f64 {
    sigma / E2_OVER_H
}

/// A conductivity in units of e²/h to S.
pub fn e2h_to_siemens(sigma_e2h: f64) -> f64 {
    sigma_e2h * E2_OVER_H
}

/// (σ_xx, σ_xy) arrays in S from R_xx and R_xy arrays (Ω) of the same shape, in parallel.
pub fn sigma_arrays(
    r_xx: &Array2<f64>,
    r_xy: &Array2<f64>,
    geometry: &SampleGeometry,
) -> Result<(Array2<f64>, Array2<f64>)> {
    if r_xx.dim() != r_xy.dim() {
        return Err(Error::invalid(
            "conductivity input",
            format!(
                "R_xx has shape {:?} but R_xy has {:?}",
                r_xx.dim(),
                r_xy.dim()
            ),
        ));
    }
    let inv_sq = 1.0 / geometry.squares()?;
    let mut sxx = Array2::<f64>::zeros(r_xx.dim());
    let mut sxy = Array2::<f64>::zeros(r_xx.dim());
    Zip::from(&mut sxx)
        .and(&mut sxy)
        .and(r_xx)
        .and(r_xy)
        .par_for_each(|a, b, &rxx, &rxy| {
            let (s1, s2) = invert_isotropic(rxx * inv_sq, rxy);
            *a = s1;
            *b = s2;
        });
    Ok((sxx, sxy))
}

/// The σ_xx and σ_xy channels (S) of a map with R_xx and R_xy channels, named `sxx` and `sxy`.
pub fn conductivity_channels(map: &Map, geometry: &SampleGeometry) -> Result<(Channel, Channel)> {
    let rxx = map.require(ChannelKind::Rxx)?;
    let rxy = map.require(ChannelKind::Rxy)?;
    let (sxx, sxy) = sigma_arrays(&rxx.data, &rxy.data, geometry)?;
    Ok((
        Channel::new("sxx", ChannelKind::SigmaXx, sxx),
        Channel::new("sxy", ChannelKind::SigmaXy, sxy),
    ))
}

/// Add (or replace) the `sxx` and `sxy` channels (S) of a map from its R_xx and R_xy channels.
pub fn add_conductivity(map: &mut Map, geometry: &SampleGeometry) -> Result<()> {
    let (sxx, sxy) = conductivity_channels(map, geometry)?;
    map.set_channel(sxx)?;
    map.set_channel(sxy)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::map::{Axis, Quantity};

    #[test]
    fn geometry_gives_squares() {
        // R_xx = 1500 Ω with W = 2 µm, L = 6 µm is 500 Ω/□ (check-values §12).
        let g = SampleGeometry::WidthLength {
            width_m: 2e-6,
            length_m: 6e-6,
        };
        assert!((g.rho_xx(1500.0).unwrap() - 500.0).abs() < 1e-9);
        assert!(SampleGeometry::Squares(0.0).squares().is_err());
        let bad = SampleGeometry::WidthLength {
            width_m: -1.0,
            length_m: 1.0,
        };
        assert!(bad.squares().unwrap_err().to_string().contains("width"));
    }

    #[test]
    fn missing_and_zero_give_nan() {
        let (a, b) = sigma_from_rho(f64::NAN, 10.0);
        assert!(a.is_nan() && b.is_nan());
        let (a, b) = sigma_from_rho(0.0, 0.0);
        assert!(a.is_nan() && b.is_nan());
        // Large but finite values do not overflow to zero.
        let (a, _) = sigma_from_rho(1e200, 0.0);
        assert!((a * 1e200 - 1.0).abs() < 1e-12);
    }

    #[test]
    fn map_gets_sigma_channels() {
        let x = Axis::uniform("vg", Quantity::Gate, 0.0, 1.0, 3).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 0.0, 1.0, 2).unwrap();
        let mut m = Map::new(x, y);
        assert!(add_conductivity(&mut m, &SampleGeometry::Squares(1.0)).is_err());
        m.add_channel(Channel::new(
            "rxx",
            ChannelKind::Rxx,
            Array2::from_elem((2, 3), 1000.0),
        ))
        .unwrap();
        m.add_channel(Channel::new(
            "rxy",
            ChannelKind::Rxy,
            Array2::from_elem((2, 3), 5000.0),
        ))
        .unwrap();
        add_conductivity(&mut m, &SampleGeometry::Squares(2.0)).unwrap();
        let sxx = m.channel("sxx").unwrap();
        assert_eq!(sxx.unit, "S");
        // ρ_xx = 500 Ω, ρ_xy = 5000 Ω → σ_xx = 500/(500² + 5000²).
        assert!((sxx.data[[1, 2]] - 500.0 / (500.0f64.powi(2) + 5000.0f64.powi(2))).abs() < 1e-18);
        assert!(m.channel("sxy").unwrap().data[[0, 0]] < 0.0);
    }
}

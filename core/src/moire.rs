//! Moiré superlattice geometry: wavelength λ, cell area A, densities per cell, flux per cell and
//! Brown–Zak fields, with the inverse relations used to read a twist angle off a measurement.
//!
//! Conventions: A = (√3/2) λ² (triangular superlattice); n₀ = 1/A is one carrier per moiré cell;
//! n_s = 4 n₀ fills a four-fold (spin × valley) moiré band. The flux quantum is φ₀ = h/e. Lengths
//! in m, densities in m⁻², fields in T, angles in radians unless a name says `_deg`.

use crate::constants::FLUX_QUANTUM_H_OVER_E;
use crate::error::{Error, Result};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Graphene lattice constant a in m (0.246 nm), the default lattice parameter.
pub const GRAPHENE_LATTICE_M: f64 = 0.246e-9;
/// Default graphene/hBN lattice mismatch δ = a_hBN/a_G − 1 = 1.8 % (a parameter, not a constant).
pub const HBN_MISMATCH_DEFAULT: f64 = 0.018;
/// Carriers per moiré cell at full filling of a four-fold band (n_s = 4 n₀).
pub const FLAVOURS: f64 = 4.0;

fn check_positive(what: &str, x: f64) -> Result<()> {
    if x.is_finite() && x > 0.0 {
        Ok(())
    } else {
        Err(Error::invalid(
            what,
            format!("{x} is not a finite positive number"),
        ))
    }
}

/// Moiré wavelength λ (m) of twisted bilayer graphene, λ = a/(2 sin(θ/2)), for lattice constant
/// `a_m` (m) and twist `theta_rad` (rad, 0 < |θ| ≤ π).
pub fn twisted_bilayer_wavelength(a_m: f64, theta_rad: f64) -> Result<f64> {
    check_positive("lattice constant", a_m)?;
    let half = (theta_rad / 2.0).sin().abs();
    if !theta_rad.is_finite() || half == 0.0 {
        return Err(Error::invalid(
            "twist angle",
            format!("{theta_rad} rad gives no moiré pattern; expected a non-zero finite angle"),
        ));
    }
    Ok(a_m / (2.0 * half))
}

/// Moiré wavelength λ (m) of graphene on hBN, λ = (1+δ)a/√(2(1+δ)(1−cos θ)+δ²), for graphene
/// lattice constant `a_m` (m), mismatch `delta` (dimensionless, e.g. 0.018) and twist
/// `theta_rad` (rad). At δ = 0 and θ = 0 there is no pattern (error).
pub fn hbn_wavelength(a_m: f64, delta: f64, theta_rad: f64) -> Result<f64> {
    check_positive("lattice constant", a_m)?;
    if !delta.is_finite() || delta <= -1.0 {
        return Err(Error::invalid(
            "lattice mismatch",
            format!("{delta} is outside (−1, ∞)"),
        ));
    }
    if !theta_rad.is_finite() {
        return Err(Error::invalid("twist angle", "not a finite number"));
    }
    let d2 = 2.0 * (1.0 + delta) * (1.0 - theta_rad.cos()) + delta * delta;
    if d2 <= 0.0 {
        return Err(Error::invalid(
            "twist angle",
            "zero mismatch and zero twist give no moiré pattern",
        ));
    }
    Ok((1.0 + delta) * a_m / d2.sqrt())
}

/// Largest graphene/hBN wavelength (m), reached at θ = 0: λ_max = (1+δ)a/δ.
pub fn hbn_max_wavelength(a_m: f64, delta: f64) -> Result<f64> {
    hbn_wavelength(a_m, delta, 0.0)
}

/// A moiré superlattice described by its wavelength λ (m). Stored in project files.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Moire {
    /// Moiré wavelength λ in m.
    pub lambda_m: f64,
}

impl Moire {
    /// A superlattice of wavelength `lambda_m` (m, finite and positive).
    pub fn new(lambda_m: f64) -> Result<Moire> {
        check_positive("moiré wavelength", lambda_m)?;
        Ok(Moire { lambda_m })
    }

    /// Twisted bilayer graphene at twist `theta_deg` (degrees) with lattice constant `a_m` (m).
    pub fn twisted_bilayer(theta_deg: f64, a_m: f64) -> Result<Moire> {
        Moire::new(twisted_bilayer_wavelength(a_m, theta_deg.to_radians())?)
    }

    /// Graphene on hBN at twist `theta_deg` (degrees), lattice `a_m` (m) and mismatch `delta`.
    pub fn graphene_hbn(theta_deg: f64, a_m: f64, delta: f64) -> Result<Moire> {
        Moire::new(hbn_wavelength(a_m, delta, theta_deg.to_radians())?)
    }

    /// The cell whose area is A = (√3/2)λ² = 1/n₀, from one-carrier-per-cell density `n0_m2` (m⁻²).
    pub fn from_n0(n0_m2: f64) -> Result<Moire> {
        check_positive("n₀ (density per moiré cell)", n0_m2)?;
        Moire::from_area(1.0 / n0_m2)
    }

    /// The cell from full-filling density `ns_m2` = 4/A (m⁻²).
    pub fn from_full_filling(ns_m2: f64) -> Result<Moire> {
        check_positive("n_s (full-filling density)", ns_m2)?;
        Moire::from_area(FLAVOURS / ns_m2)
    }

    /// The cell of area `area_m2` (m²).
    pub fn from_area(area_m2: f64) -> Result<Moire> {
        check_positive("moiré cell area", area_m2)?;
        Moire::new((2.0 * area_m2 / 3f64.sqrt()).sqrt())
    }

    /// The cell for which field `b_t` (T) is the Brown–Zak field of flux ratio φ/φ₀ = `flux`:
    /// A = flux · φ₀ / B.
    pub fn from_brown_zak_field(b_t: f64, flux: Rational) -> Result<Moire> {
        if flux.numer() <= 0 {
            return Err(Error::invalid(
                "flux ratio",
                format!("{flux} must be positive"),
            ));
        }
        check_positive("Brown–Zak field", b_t.abs())?;
        Moire::from_area(flux.to_f64() * FLUX_QUANTUM_H_OVER_E / b_t.abs())
    }

    /// Cell area A = (√3/2)λ² in m².
    pub fn area_m2(&self) -> f64 {
        3f64.sqrt() / 2.0 * self.lambda_m * self.lambda_m
    }

    /// Density of one carrier per cell n₀ = 1/A in m⁻².
    pub fn n0_m2(&self) -> f64 {
        1.0 / self.area_m2()
    }

    /// Full-filling density n_s = 4/A in m⁻².
    pub fn full_filling_m2(&self) -> f64 {
        FLAVOURS * self.n0_m2()
    }

    /// Field B₁ = φ₀/A in T that threads one flux quantum h/e through each cell.
    pub fn one_flux_field_t(&self) -> f64 {
        FLUX_QUANTUM_H_OVER_E / self.area_m2()
    }

    /// Flux per cell φ/φ₀ = B A/(h/e) (dimensionless) at field `b_t` (T).
    pub fn flux_ratio(&self, b_t: f64) -> f64 {
        b_t / self.one_flux_field_t()
    }

    /// Brown–Zak field B = (p/q) φ₀/A in T at flux ratio `flux` = p/q.
    pub fn brown_zak_field_t(&self, flux: Rational) -> f64 {
        flux.to_f64() * self.one_flux_field_t()
    }

    /// Twist angle θ in degrees of twisted bilayer graphene with this λ: θ = 2 arcsin(a/2λ).
    /// Errors when λ < a/2 (no such twist).
    pub fn twisted_bilayer_twist_deg(&self, a_m: f64) -> Result<f64> {
        check_positive("lattice constant", a_m)?;
        let x = a_m / (2.0 * self.lambda_m);
        if x > 1.0 {
            return Err(Error::invalid(
                "moiré wavelength",
                format!(
                    "λ = {} nm is shorter than a/2 = {} nm: no twisted bilayer has it",
                    self.lambda_m * 1e9,
                    a_m * 0.5e9
                ),
            ));
        }
        Ok((2.0 * x.asin()).to_degrees())
    }

    /// Twist angle θ ≥ 0 in degrees of graphene on hBN with this λ, lattice `a_m` (m) and
    /// mismatch `delta`, from 1 − cos θ = ((1+δ)²a²/λ² − δ²)/(2(1+δ)). Errors when λ exceeds
    /// λ_max = (1+δ)a/δ or is too short for any angle.
    pub fn graphene_hbn_twist_deg(&self, a_m: f64, delta: f64) -> Result<f64> {
        check_positive("lattice constant", a_m)?;
        if !delta.is_finite() || delta <= -1.0 {
            return Err(Error::invalid(
                "lattice mismatch",
                format!("{delta} is outside (−1, ∞)"),
            ));
        }
        let r = (1.0 + delta) * a_m / self.lambda_m;
        let one_minus_cos = (r * r - delta * delta) / (2.0 * (1.0 + delta));
        // Allow rounding at exact alignment (λ = λ_max).
        let tol = 1e-12;
        if one_minus_cos < -tol || one_minus_cos > 2.0 + tol {
            let lmax = (1.0 + delta) * a_m / delta.abs();
            return Err(Error::invalid(
                "moiré wavelength",
                format!(
                    "λ = {:.4} nm is not reached by graphene on hBN with δ = {delta} (λ_max = {:.4} nm)",
                    self.lambda_m * 1e9,
                    lmax * 1e9
                ),
            ));
        }
        let c = (1.0 - one_minus_cos).clamp(-1.0, 1.0);
        Ok(c.acos().to_degrees())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn inverses_return_the_twist() {
        for th in [0.5, 1.05, 1.3, 3.0] {
            let m = Moire::twisted_bilayer(th, GRAPHENE_LATTICE_M).unwrap();
            let back = Moire::from_full_filling(m.full_filling_m2()).unwrap();
            assert_relative_eq!(
                back.twisted_bilayer_twist_deg(GRAPHENE_LATTICE_M).unwrap(),
                th,
                max_relative = 1e-12
            );
            let h = Moire::graphene_hbn(th, GRAPHENE_LATTICE_M, 0.018).unwrap();
            assert_relative_eq!(
                h.graphene_hbn_twist_deg(GRAPHENE_LATTICE_M, 0.018).unwrap(),
                th,
                max_relative = 1e-9
            );
        }
    }

    #[test]
    fn impossible_geometries_are_errors() {
        assert!(Moire::twisted_bilayer(0.0, GRAPHENE_LATTICE_M).is_err());
        assert!(hbn_wavelength(GRAPHENE_LATTICE_M, 0.0, 0.0).is_err());
        assert!(Moire::new(-1.0).is_err());
        assert!(Moire::from_n0(f64::NAN).is_err());
        let too_long = Moire::new(20e-9).unwrap();
        assert!(too_long
            .graphene_hbn_twist_deg(GRAPHENE_LATTICE_M, 0.018)
            .is_err());
        assert!(Moire::from_brown_zak_field(10.0, Rational::ZERO).is_err());
    }

    #[test]
    fn brown_zak_round_trip() {
        let m = Moire::new(13e-9).unwrap();
        let f = Rational::new(2, 5).unwrap();
        let b = m.brown_zak_field_t(f);
        assert_relative_eq!(m.flux_ratio(b), 0.4, max_relative = 1e-14);
        let back = Moire::from_brown_zak_field(b, f).unwrap();
        assert_relative_eq!(back.lambda_m, 13e-9, max_relative = 1e-14);
    }
}

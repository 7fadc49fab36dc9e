//! Filling factor and quantised Hall response.
//!
//! ν = n h / (e B): the number of filled (non-degenerate) Landau levels at density n (m⁻²) and
//! field B (T). A quantum Hall plateau at filling ν has R_xy = R_K/ν and σ_xy = ν e²/h.

use crate::constants::{E2_OVER_H, E_OVER_H, VON_KLITZING_R_K};

/// Filling factor ν = n h/(e B) (dimensionless) at density `n_m2` (m⁻²) and field `b_t` (T).
///
/// Returns NaN at B = 0 (ν is undefined there) and for non-finite input; never divides by zero.
/// The sign follows n·B: electrons (n < 0) at B > 0 give ν < 0.
pub fn filling_factor(n_m2: f64, b_t: f64) -> f64 {
    if b_t == 0.0 || !b_t.is_finite() || !n_m2.is_finite() {
        return f64::NAN;
    }
    n_m2 / (E_OVER_H * b_t)
}

/// Density n = ν e B / h in m⁻² that fills `nu` Landau levels at field `b_t` (T).
pub fn density_at_filling(nu: f64, b_t: f64) -> f64 {
    nu * E_OVER_H * b_t
}

/// Field B = n h/(e ν) in T at which density `n_m2` (m⁻²) sits at filling `nu`.
/// NaN for ν = 0 or non-finite input.
pub fn field_at_filling(n_m2: f64, nu: f64) -> f64 {
    if nu == 0.0 || !nu.is_finite() || !n_m2.is_finite() {
        return f64::NAN;
    }
    n_m2 / (E_OVER_H * nu)
}

/// Hall plateau resistance R_xy = R_K/ν in Ω at filling `nu` (NaN for ν = 0: no plateau).
pub fn hall_plateau_resistance(nu: f64) -> f64 {
    if nu == 0.0 || !nu.is_finite() {
        return f64::NAN;
    }
    VON_KLITZING_R_K / nu
}

/// Hall conductance σ_xy = ν e²/h in S at filling (or Chern number) `nu`.
pub fn hall_conductance(nu: f64) -> f64 {
    nu * E2_OVER_H
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn filling_is_nan_at_zero_field() {
        assert!(filling_factor(1e16, 0.0).is_nan());
        assert!(filling_factor(1e16, -0.0).is_nan());
        assert!(field_at_filling(1e16, 0.0).is_nan());
        assert!(hall_plateau_resistance(0.0).is_nan());
    }

    #[test]
    fn density_and_filling_are_inverse() {
        for &(nu, b) in &[(2.0, 9.0), (-6.0, 3.5), (2.0 / 3.0, 12.0)] {
            let n = density_at_filling(nu, b);
            assert_relative_eq!(filling_factor(n, b), nu, max_relative = 1e-14);
            assert_relative_eq!(field_at_filling(n, nu), b, max_relative = 1e-14);
        }
    }

    #[test]
    fn plateau_times_conductance_is_one() {
        // R_xy σ_xy = R_K e²/h = 1 exactly (SI 2019 definitions).
        for nu in [1.0, 2.0, 1.0 / 3.0, 5.0 / 2.0] {
            assert_relative_eq!(
                hall_plateau_resistance(nu) * hall_conductance(nu),
                1.0,
                max_relative = 1e-14
            );
        }
    }
}

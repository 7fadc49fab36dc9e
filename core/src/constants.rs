//! Physical constants: the exact defining constants of the 2019 SI and the quantities derived
//! from them that quantum Hall work needs. One place, used everywhere.
//!
//! Source: SI Brochure, 9th edition (BIPM 2019); ε₀ from CODATA 2018 (ε₀ = e²/(2αhc)).

/// Planck constant h in J s (exact, SI 2019).
pub const PLANCK_H: f64 = 6.626_070_15e-34;
/// Elementary charge e in C (exact, SI 2019).
pub const ELEMENTARY_CHARGE: f64 = 1.602_176_634e-19;
/// Boltzmann constant k_B in J/K (exact, SI 2019).
pub const BOLTZMANN_K: f64 = 1.380_649e-23;
/// Reduced Planck constant ħ = h/2π in J s.
pub const HBAR: f64 = PLANCK_H / (2.0 * std::f64::consts::PI);
/// Vacuum permittivity ε₀ in F/m (CODATA 2018; measured, not exact since 2019).
pub const EPSILON_0: f64 = 8.854_187_812_8e-12;
/// Electron rest mass m_e in kg (CODATA 2018).
pub const ELECTRON_MASS: f64 = 9.109_383_701_5e-31;

/// von Klitzing constant R_K = h/e² in Ω (exact since 2019): the ν = 1 Hall resistance.
pub const VON_KLITZING_R_K: f64 = PLANCK_H / (ELEMENTARY_CHARGE * ELEMENTARY_CHARGE);
/// Conductance quantum per flavour e²/h in S.
pub const E2_OVER_H: f64 = ELEMENTARY_CHARGE * ELEMENTARY_CHARGE / PLANCK_H;
/// Single-electron flux quantum φ₀ = h/e in Wb (T m²). Not the superconducting h/2e.
pub const FLUX_QUANTUM_H_OVER_E: f64 = PLANCK_H / ELEMENTARY_CHARGE;
/// e/h in T⁻¹ m⁻²: the density of one non-degenerate Landau level per tesla.
pub const E_OVER_H: f64 = ELEMENTARY_CHARGE / PLANCK_H;

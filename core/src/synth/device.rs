//! The devices of the project's own fictitious lab, the Skerry Bay cryogenic transport lab:
//! their stacks, gates, geometry and the parameters of the transport model.

use crate::error::{Error, Result};
use crate::gate::SingleGate;
use crate::moire;
use serde::{Deserialize, Serialize};
use std::fmt;
use std::str::FromStr;

/// Name of the invented lab the demo devices belong to.
pub const LAB_NAME: &str = "Skerry Bay cryogenic transport lab";

pub use crate::gate::Dielectric;
pub use crate::moire::GRAPHENE_LATTICE_M;

/// The synthetic devices fanmark can generate.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DeviceName {
    /// Monolayer graphene Hall bar on 285 nm SiO₂ with a doped-Si back gate.
    Wren,
    /// hBN-encapsulated monolayer graphene aligned to hBN (moiré) on a graphite bottom gate.
    Tern,
}

impl DeviceName {
    /// Every device, in the order they are listed to the user.
    pub const ALL: [DeviceName; 2] = [DeviceName::Wren, DeviceName::Tern];

    /// The command-line name (`wren`, `tern`).
    pub fn as_str(self) -> &'static str {
        match self {
            DeviceName::Wren => "wren",
            DeviceName::Tern => "tern",
        }
    }
}

impl fmt::Display for DeviceName {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.as_str())
    }
}

impl FromStr for DeviceName {
    type Err = Error;
    fn from_str(s: &str) -> Result<Self> {
        let t = s.trim().to_ascii_lowercase();
        DeviceName::ALL
            .into_iter()
            .find(|d| d.as_str() == t)
            .ok_or_else(|| {
                Error::invalid(
                    "device",
                    format!(
                        "`{s}` is not a synthetic device; the devices are: {}",
                        DeviceName::ALL.map(|d| d.as_str()).join(", ")
                    ),
                )
            })
    }
}

/// The moiré superlattice of a graphene/hBN device, described by how the stack was made; the
/// geometry itself is [`crate::moire`]'s.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Moire {
    /// Lattice mismatch δ between hBN and graphene (dimensionless, e.g. 0.018).
    pub mismatch: f64,
    /// Twist angle θ between the lattices, in degrees.
    pub twist_deg: f64,
    /// Graphene lattice constant a in m.
    pub lattice_m: f64,
}

impl Moire {
    /// The superlattice cell; NaN wavelength if the parameters give no moiré pattern.
    pub fn cell(&self) -> moire::Moire {
        moire::Moire::graphene_hbn(self.twist_deg, self.lattice_m, self.mismatch)
            .unwrap_or(moire::Moire { lambda_m: f64::NAN })
    }
    /// Moiré wavelength λ in m: λ = (1+δ)a/√(2(1+δ)(1−cos θ)+δ²).
    pub fn wavelength_m(&self) -> f64 {
        self.cell().lambda_m
    }
    /// Moiré cell area A = (√3/2)λ² in m².
    pub fn cell_area_m2(&self) -> f64 {
        self.cell().area_m2()
    }
    /// One carrier per moiré cell, n₀ = 1/A, in m⁻² (full filling of a four-fold band: 4n₀).
    pub fn n0_m2(&self) -> f64 {
        self.cell().n0_m2()
    }
    /// Field of one flux quantum h/e per moiré cell, φ₀/A, in T.
    pub fn one_flux_field_t(&self) -> f64 {
        self.cell().one_flux_field_t()
    }
}

/// A synthetic device: stack, gate, geometry and transport-model parameters.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Device {
    /// Which device.
    pub name: DeviceName,
    /// One-line description of the stack, top to bottom.
    pub stack: String,
    /// The gate dielectric.
    pub dielectric: Dielectric,
    /// Gate voltage of charge neutrality, V.
    pub v_cnp: f64,
    /// Hall-bar channel width W between the voltage probes' edges, m.
    pub width_m: f64,
    /// Distance L between the longitudinal voltage probes, m.
    pub length_m: f64,
    /// Moiré superlattice, if any.
    pub moire: Option<Moire>,
    /// Dirac velocity v_F of the main cone, m/s.
    pub fermi_velocity: f64,
    /// Dirac velocity of the satellite cones at s = ±4, m/s (moiré devices).
    pub satellite_velocity: f64,
    /// Transport mobility μ near the main cone, m² V⁻¹ s⁻¹.
    pub mobility: f64,
    /// Transport mobility near the satellite cones, m² V⁻¹ s⁻¹.
    pub satellite_mobility: f64,
    /// Residual (electron–hole puddle) density at the Dirac point, m⁻².
    pub puddle_m2: f64,
    /// Residual density at the satellite Dirac points, m⁻².
    pub satellite_puddle_m2: f64,
    /// Disorder broadening of Landau-level gaps at nominal disorder, K.
    pub broadening_ll_k: f64,
    /// Disorder broadening of interaction-driven gaps (broken symmetry, fractions, Hofstadter
    /// minigaps) at nominal disorder, K.
    pub broadening_int_k: f64,
    /// Usable gate range (min, max), V.
    pub gate_range_v: (f64, f64),
    /// Magnet range (min, max), T.
    pub field_range_t: (f64, f64),
    /// Nominal sample temperature, K.
    pub temperature_k: f64,
}

impl Device {
    /// The device's parameters.
    pub fn of(name: DeviceName) -> Device {
        match name {
            DeviceName::Wren => Device {
                name,
                stack: "monolayer graphene / 285 nm SiO₂ (ε_r 3.9) / p++ Si back gate".into(),
                dielectric: Dielectric {
                    epsilon_r: 3.9,
                    thickness_m: 285e-9,
                },
                v_cnp: 1.3,
                width_m: 1.5e-6,
                length_m: 3.0e-6,
                moire: None,
                fermi_velocity: 1.05e6,
                satellite_velocity: 0.0,
                mobility: 1.2,
                satellite_mobility: 0.0,
                puddle_m2: 6e14,
                satellite_puddle_m2: 0.0,
                broadening_ll_k: 150.0,
                broadening_int_k: 14.0,
                gate_range_v: (-60.0, 60.0),
                field_range_t: (0.0, 14.0),
                temperature_k: 1.6,
            },
            DeviceName::Tern => Device {
                name,
                stack: "hBN (40 nm) / monolayer graphene aligned to hBN / hBN (30 nm, ε_r 3.4) \
                        / graphite bottom gate"
                    .into(),
                dielectric: Dielectric {
                    epsilon_r: 3.4,
                    thickness_m: 30e-9,
                },
                v_cnp: -0.08,
                width_m: 1.0e-6,
                length_m: 2.0e-6,
                moire: Some(Moire {
                    mismatch: 0.018,
                    twist_deg: 0.42,
                    lattice_m: GRAPHENE_LATTICE_M,
                }),
                fermi_velocity: 1.0e6,
                satellite_velocity: 0.6e6,
                mobility: 8.0,
                satellite_mobility: 2.5,
                puddle_m2: 1.2e14,
                satellite_puddle_m2: 3e14,
                broadening_ll_k: 25.0,
                broadening_int_k: 3.0,
                gate_range_v: (-5.6, 5.6),
                field_range_t: (0.0, 16.0),
                temperature_k: 1.5,
            },
        }
    }

    /// The device's gate: geometric lever arm of its dielectric and its V_CNP (NaN lever arm if
    /// the dielectric is unphysical).
    pub fn gate(&self) -> SingleGate {
        SingleGate::from_geometry(&self.dielectric, self.v_cnp).unwrap_or(SingleGate {
            alpha_m2_per_v: f64::NAN,
            v_cnp: self.v_cnp,
        })
    }
    /// Density per volt α of the gate, m⁻² V⁻¹.
    pub fn alpha_m2_per_v(&self) -> f64 {
        self.gate().alpha_m2_per_v
    }
    /// Carrier density n = α(V_g − V_CNP) in m⁻².
    pub fn density(&self, vg: f64) -> f64 {
        self.gate().density(vg)
    }
    /// Gate voltage (V) at which the density is `n` (m⁻²).
    pub fn gate_for_density(&self, n: f64) -> f64 {
        self.gate().gate_for_density(n)
    }
    /// n₀ = 1/A in m⁻², or 0 for a device without a superlattice.
    pub fn n0_m2(&self) -> f64 {
        self.moire.map_or(0.0, |m| m.n0_m2())
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lever_arms_match_parallel_plate_values() {
        // check-values §3: 285 nm SiO₂ (ε_r 3.9) gives 7.562 37×10¹⁰ cm⁻² V⁻¹ and 30 nm hBN
        // (ε_r 3.4) gives 6.263 20×10¹¹ cm⁻² V⁻¹ (C = ε₀ε_r/d, n/V = C/e).
        let wren = Device::of(DeviceName::Wren).alpha_m2_per_v() / 1e4;
        let tern = Device::of(DeviceName::Tern).alpha_m2_per_v() / 1e4;
        assert!((wren / 7.562_37e10 - 1.0).abs() < 2e-6, "{wren}");
        assert!((tern / 6.263_20e11 - 1.0).abs() < 2e-6, "{tern}");
    }

    #[test]
    fn moire_geometry_matches_reference_table() {
        // check-values §5 (graphene on hBN, δ = 1.8 %, a = 0.246 nm): θ = 0 gives λ = 13.9127 nm
        // and φ₀/A = 24.671 T; θ = 0.5° gives λ = 12.4976 nm, n_s = 4/A = 2.957 17×10¹² cm⁻²
        // and φ₀/A = 30.575 T.
        let m0 = Moire {
            mismatch: 0.018,
            twist_deg: 0.0,
            lattice_m: GRAPHENE_LATTICE_M,
        };
        assert!((m0.wavelength_m() * 1e9 - 13.9127).abs() < 1e-4);
        assert!((m0.one_flux_field_t() - 24.671).abs() < 1e-3);
        let m5 = Moire {
            twist_deg: 0.5,
            ..m0
        };
        assert!((m5.wavelength_m() * 1e9 - 12.4976).abs() < 1e-4);
        assert!((4.0 * m5.n0_m2() / 1e4 / 2.957_17e12 - 1.0).abs() < 1e-5);
        assert!((m5.one_flux_field_t() - 30.575).abs() < 1e-3);
    }

    #[test]
    fn unknown_device_lists_the_devices() {
        assert_eq!("Wren".parse::<DeviceName>().unwrap(), DeviceName::Wren);
        let e = "heron".parse::<DeviceName>().unwrap_err().to_string();
        assert!(
            e.contains("heron") && e.contains("wren") && e.contains("tern"),
            "{e}"
        );
    }
}

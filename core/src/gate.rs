//! Gate models: from gate voltages to carrier density n (and displacement field D for two
//! gates). Serde types, stored in calibration and project files.
//!
//! Everything is SI: capacitances per area in F/m², densities in m⁻², lever arms in m⁻² V⁻¹,
//! D/ε₀ in V/m.

use crate::constants::{ELEMENTARY_CHARGE, EPSILON_0, HBAR};
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// Fermi velocity of monolayer graphene commonly used for estimates, 1.0×10⁶ m/s
/// (common practice; the measured value depends on the device and its screening).
pub const GRAPHENE_FERMI_VELOCITY_M_PER_S: f64 = 1.0e6;

/// A single gate: n = α (V_g − V_CNP).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SingleGate {
    /// Lever arm α in m⁻² V⁻¹ (density per volt).
    pub alpha_m2_per_v: f64,
    /// Gate voltage of charge neutrality V_CNP, in V.
    pub v_cnp: f64,
}

impl SingleGate {
    /// Carrier density n in m⁻² at gate voltage `vg` (V).
    pub fn density(&self, vg: f64) -> f64 {
        self.alpha_m2_per_v * (vg - self.v_cnp)
    }
    /// Gate voltage (V) that gives density `n` (m⁻²).
    pub fn gate_for_density(&self, n: f64) -> f64 {
        self.v_cnp + n / self.alpha_m2_per_v
    }
    /// A gate whose lever arm is the geometric one of `dielectric`: α = C/e with C = ε₀ε_r/d.
    /// `v_cnp` is the charge-neutrality voltage in V. Errors if the dielectric is unphysical.
    pub fn from_geometry(dielectric: &Dielectric, v_cnp: f64) -> Result<SingleGate> {
        if !v_cnp.is_finite() {
            return Err(Error::invalid(
                "v_cnp",
                format!("must be a finite voltage, got {v_cnp}"),
            ));
        }
        Ok(SingleGate {
            alpha_m2_per_v: dielectric.capacitance()? / ELEMENTARY_CHARGE,
            v_cnp,
        })
    }
}

/// A parallel-plate gate dielectric: thickness d (m) and relative out-of-plane permittivity ε_r.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Dielectric {
    /// Thickness d in m (e.g. 285e-9 for 285 nm SiO₂).
    pub thickness_m: f64,
    /// Relative permittivity ε_r perpendicular to the layer (SiO₂ 3.9; hBN 3–4).
    pub epsilon_r: f64,
}

impl Dielectric {
    /// Geometric capacitance per area C = ε₀ε_r/d in F/m². Errors unless d > 0 and ε_r > 0.
    pub fn capacitance(&self) -> Result<f64> {
        if !(self.thickness_m > 0.0 && self.thickness_m.is_finite()) {
            return Err(Error::invalid(
                "dielectric thickness",
                format!("must be a positive length in m, got {}", self.thickness_m),
            ));
        }
        if !(self.epsilon_r > 0.0 && self.epsilon_r.is_finite()) {
            return Err(Error::invalid(
                "dielectric epsilon_r",
                format!("must be positive, got {}", self.epsilon_r),
            ));
        }
        Ok(EPSILON_0 * self.epsilon_r / self.thickness_m)
    }
    /// Geometric lever arm α = C/e in m⁻² V⁻¹.
    pub fn lever_arm(&self) -> Result<f64> {
        Ok(self.capacitance()? / ELEMENTARY_CHARGE)
    }
}

/// Quantum capacitance per area of monolayer graphene, C_Q = 2e²√|n| / (ħ v_F √π), in F/m²,
/// at density `n` (m⁻²) and Fermi velocity `v_f` (m/s). This is e² times the density of states
/// of the Dirac cone with four flavours at the Fermi level; it vanishes at neutrality (no
/// disorder broadening in this model).
pub fn graphene_quantum_capacitance(n: f64, v_f: f64) -> f64 {
    2.0 * ELEMENTARY_CHARGE * ELEMENTARY_CHARGE * n.abs().sqrt()
        / (HBAR * v_f * std::f64::consts::PI.sqrt())
}

/// Series combination C_g C_Q/(C_g + C_Q) of a geometric and a quantum capacitance (F/m²).
/// Returns 0 when both are 0.
pub fn series_capacitance(c_geometric: f64, c_quantum: f64) -> f64 {
    let sum = c_geometric + c_quantum;
    if sum == 0.0 {
        0.0
    } else {
        c_geometric * c_quantum / sum
    }
}

/// Effective (differential) lever arm dn/dV_g in m⁻² V⁻¹ of a gate with geometric capacitance
/// `c_geometric` (F/m²) on monolayer graphene at reference density `n_ref` (m⁻²).
///
/// Meaning: moving the gate by dV changes both the electrostatic potential (e dn/C_g) and the
/// chemical potential (e dn/C_Q), so dn/dV = C_s/e with C_s the series capacitance. Near
/// neutrality C_Q → 0 and the effective lever arm drops below the geometric C_g/e; far from
/// it the two agree. Use it to judge how far a geometric calibration is off at a given density.
pub fn effective_lever_arm(c_geometric: f64, n_ref: f64, v_f: f64) -> f64 {
    series_capacitance(c_geometric, graphene_quantum_capacitance(n_ref, v_f)) / ELEMENTARY_CHARGE
}

/// Fractional reduction 1 − C_s/C_g = C_g/(C_g + C_Q) of the lever arm by the graphene quantum
/// capacitance at density `n_ref` (m⁻²); e.g. 0.104 means the effective lever arm is 10.4 %
/// below the geometric one.
pub fn quantum_capacitance_correction(c_geometric: f64, n_ref: f64, v_f: f64) -> f64 {
    let cq = graphene_quantum_capacitance(n_ref, v_f);
    let sum = c_geometric + cq;
    if sum == 0.0 {
        0.0
    } else {
        c_geometric / sum
    }
}

/// Two gates (top and bottom) acting on one sheet.
///
/// With ΔV_t = V_t − V_t0 and ΔV_b = V_b − V_b0:
/// * n = (C_t ΔV_t + C_b ΔV_b)/e − n_offset (m⁻²);
/// * D/ε₀ = (C_t ΔV_t − C_b ΔV_b)/(2ε₀) (V/m).
///
/// Sign convention: D/ε₀ is positive when the top gate dominates (C_t ΔV_t > C_b ΔV_b).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct DualGate {
    /// Top-gate capacitance per area C_t in F/m².
    pub c_top_f_per_m2: f64,
    /// Bottom-gate capacitance per area C_b in F/m².
    pub c_bottom_f_per_m2: f64,
    /// Top-gate offset V_t0 in V (subtracted from V_t).
    pub v_top_offset: f64,
    /// Bottom-gate offset V_b0 in V (subtracted from V_b).
    pub v_bottom_offset: f64,
    /// Residual (e.g. chemical-doping) density subtracted from n, in m⁻².
    pub n_offset_m2: f64,
}

impl DualGate {
    /// A dual gate from capacitances (F/m²) with zero offsets; both must be positive.
    pub fn new(c_top: f64, c_bottom: f64) -> Result<DualGate> {
        let gate = DualGate {
            c_top_f_per_m2: c_top,
            c_bottom_f_per_m2: c_bottom,
            v_top_offset: 0.0,
            v_bottom_offset: 0.0,
            n_offset_m2: 0.0,
        };
        gate.validate()?;
        Ok(gate)
    }
    /// A dual gate from the top and bottom dielectrics, zero offsets.
    pub fn from_dielectrics(top: &Dielectric, bottom: &Dielectric) -> Result<DualGate> {
        DualGate::new(top.capacitance()?, bottom.capacitance()?)
    }
    /// Check that both capacitances are positive and finite and the offsets finite.
    pub fn validate(&self) -> Result<()> {
        for (what, c) in [
            ("c_top_f_per_m2", self.c_top_f_per_m2),
            ("c_bottom_f_per_m2", self.c_bottom_f_per_m2),
        ] {
            if !(c > 0.0 && c.is_finite()) {
                return Err(Error::invalid(
                    what,
                    format!("must be a positive capacitance per area in F/m², got {c}"),
                ));
            }
        }
        for (what, v) in [
            ("v_top_offset", self.v_top_offset),
            ("v_bottom_offset", self.v_bottom_offset),
            ("n_offset_m2", self.n_offset_m2),
        ] {
            if !v.is_finite() {
                return Err(Error::invalid(what, format!("must be finite, got {v}")));
            }
        }
        Ok(())
    }
    /// Carrier density n (m⁻²) at top-gate `vt` and bottom-gate `vb` voltages (V).
    pub fn density(&self, vt: f64, vb: f64) -> f64 {
        (self.c_top_f_per_m2 * (vt - self.v_top_offset)
            + self.c_bottom_f_per_m2 * (vb - self.v_bottom_offset))
            / ELEMENTARY_CHARGE
            - self.n_offset_m2
    }
    /// Displacement field D/ε₀ (V/m) at `vt`, `vb` (V); positive when the top gate dominates.
    pub fn displacement(&self, vt: f64, vb: f64) -> f64 {
        (self.c_top_f_per_m2 * (vt - self.v_top_offset)
            - self.c_bottom_f_per_m2 * (vb - self.v_bottom_offset))
            / (2.0 * EPSILON_0)
    }
    /// (n in m⁻², D/ε₀ in V/m) at `vt`, `vb` (V).
    pub fn density_displacement(&self, vt: f64, vb: f64) -> (f64, f64) {
        (self.density(vt, vb), self.displacement(vt, vb))
    }
    /// The exact inverse: gate voltages (V_t, V_b) in V that give density `n` (m⁻²) and
    /// displacement `d_over_eps0` (V/m).
    pub fn gates_for(&self, n: f64, d_over_eps0: f64) -> (f64, f64) {
        let sum = ELEMENTARY_CHARGE * (n + self.n_offset_m2); // C_t ΔV_t + C_b ΔV_b
        let diff = 2.0 * EPSILON_0 * d_over_eps0; // C_t ΔV_t − C_b ΔV_b
        let vt = 0.5 * (sum + diff) / self.c_top_f_per_m2 + self.v_top_offset;
        let vb = 0.5 * (sum - diff) / self.c_bottom_f_per_m2 + self.v_bottom_offset;
        (vt, vb)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn geometric_lever_arm_of_300nm_oxide() {
        // 7.184 25×10¹⁰ cm⁻² V⁻¹ for 300 nm SiO₂, ε_r 3.9 (check-values §3, computed).
        let d = Dielectric {
            thickness_m: 300e-9,
            epsilon_r: 3.9,
        };
        let g = SingleGate::from_geometry(&d, 0.0).unwrap();
        let per_cm2 = g.alpha_m2_per_v / 1e4;
        assert!((per_cm2 / 7.184_25e10 - 1.0).abs() < 1e-5, "{per_cm2}");
    }

    #[test]
    fn bad_dielectric_is_refused() {
        let d = Dielectric {
            thickness_m: 0.0,
            epsilon_r: 3.9,
        };
        assert!(d
            .capacitance()
            .unwrap_err()
            .to_string()
            .contains("thickness"));
        let d = Dielectric {
            thickness_m: 1e-9,
            epsilon_r: -1.0,
        };
        assert!(SingleGate::from_geometry(&d, 0.0).is_err());
        assert!(DualGate::new(1e-3, 0.0).is_err());
    }

    #[test]
    fn dual_gate_inverse_round_trips() {
        let mut g = DualGate::new(1.0e-3, 1.2e-4).unwrap();
        g.v_top_offset = 0.1;
        g.v_bottom_offset = -0.4;
        g.n_offset_m2 = 3e14;
        for &(vt, vb) in &[(1.0, 10.0), (-2.0, 30.0), (0.0, 0.0)] {
            let (n, d) = g.density_displacement(vt, vb);
            let (vt2, vb2) = g.gates_for(n, d);
            assert!((vt2 - vt).abs() < 1e-12 && (vb2 - vb).abs() < 1e-9);
        }
        // Top gate dominating gives positive D/ε₀ (the stated convention).
        assert!(g.displacement(g.v_top_offset + 1.0, g.v_bottom_offset) > 0.0);
    }
}

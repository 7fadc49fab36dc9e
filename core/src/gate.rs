//! Gate models: from gate voltages to carrier density n (and displacement field D for two
//! gates). Serde types, stored in calibration and project files.

use serde::{Deserialize, Serialize};

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
}

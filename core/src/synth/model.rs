//! The transport model of a synthetic device: conductivity from a classical background and the
//! gapped states, inverted to resistivity and resistance. Noiseless: measurement flaws are
//! added elsewhere.
//!
//! All quantities are SI at the interface; inside, conductivities are in units of e²/h.
//! Hall sign convention: a plateau of filling factor ν (electrons at B > 0 have ν > 0) has
//! R_xy = +R_K/ν; the tensor is inverted with σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²), so there the Hall
//! conductivity is σ_xy = −ν·e²/h (its magnitude is the Středa slope t in e²/h).

use super::device::Device;
use super::states::{states_of, SynthState, BROWN_ZAK_DENOMINATORS};
use crate::constants::{E_OVER_H, FLUX_QUANTUM_H_OVER_E, VON_KLITZING_R_K};
use serde::{Deserialize, Serialize};

/// Conductivity of a half-filled Landau level deep in the quantum Hall regime, e²/h.
const LEVEL_CONDUCTIVITY: f64 = 0.4;
/// Smallest longitudinal conductivity (leakage through the bulk), e²/h.
const LEAKAGE_CONDUCTIVITY: f64 = 1e-3;
/// Extra leakage where the Hall conductance is near zero (insulating states), e²/h: keeps the
/// ν = 0 and band-insulator peaks near the MΩ range.
const INSULATOR_LEAKAGE: f64 = 0.02;
/// Half-width of the Brown–Zak features in field, T.
const BROWN_ZAK_WIDTH_T: f64 = 0.12;
/// Half-width, in s, of the crossover between the main and the satellite cones (at |s| = 2).
const CONE_CROSSOVER_S: f64 = 0.3;

/// A horizontal Brown–Zak feature at φ/φ₀ = 1/q.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BrownZak {
    /// Denominator q of the flux ratio 1/q.
    pub q: i64,
    /// Field of the feature, (1/q)·φ₀/A, in T.
    pub field_t: f64,
}

/// The noiseless transport model of one device at one temperature and disorder.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Model {
    /// The device.
    pub device: Device,
    /// Its gapped states, in truth-file order.
    pub states: Vec<SynthState>,
    /// Its Brown–Zak features (empty without a superlattice).
    pub brown_zak: Vec<BrownZak>,
    /// Sample temperature, K.
    pub temperature_k: f64,
    /// Disorder relative to the device's nominal (1 = nominal; broadenings scale with it,
    /// mobility and puddle density with its inverse and itself).
    pub disorder: f64,
}

/// Smooth ramp w·ln(1+e^{x/w}): ≈ max(x, 0) away from 0, smooth within ~w of it.
fn softplus(x: f64, w: f64) -> f64 {
    let z = x / w;
    if z > 30.0 {
        x
    } else {
        w * z.exp().ln_1p()
    }
}

/// Smooth step from 0 (x ≪ 0) to 1 (x ≫ 0) over a width w.
fn smooth_step(x: f64, w: f64) -> f64 {
    0.5 * (1.0 + (x / w).tanh())
}

impl Model {
    /// The model of `device` at temperature `temperature_k` (K) and relative `disorder`.
    pub fn new(device: Device, temperature_k: f64, disorder: f64) -> Model {
        let states = states_of(&device);
        let brown_zak = match device.moire {
            Some(m) => BROWN_ZAK_DENOMINATORS
                .iter()
                .map(|&q| BrownZak {
                    q,
                    field_t: m.one_flux_field_t() / q as f64,
                })
                .collect(),
            None => Vec::new(),
        };
        Model {
            device,
            states,
            brown_zak,
            temperature_k,
            disorder,
        }
    }

    /// Disorder broadening Γ of state `j`'s gap, K.
    pub fn broadening_k(&self, j: usize) -> f64 {
        let base = if self.states[j].interaction {
            self.device.broadening_int_k
        } else {
            self.device.broadening_ll_k
        };
        base * self.disorder
    }

    /// Density n_j(B) = t·(e/h)·B + s·n₀ of state `j`'s line at field `b_t`, m⁻².
    pub fn line_density(&self, j: usize, b_t: f64) -> f64 {
        let st = &self.states[j];
        st.t.to_f64() * E_OVER_H * b_t + st.s.to_f64() * self.device.n0_m2()
    }

    /// Weight (0…1) of state `j`'s domain at its own line at field `b_t`: where it exists.
    pub fn domain_weight_on_line(&self, j: usize, b_t: f64) -> f64 {
        let n0 = self.device.n0_m2();
        if n0 > 0.0 {
            let st = &self.states[j];
            st.domain
                .weight(st.s.to_f64(), self.line_density(j, b_t) / n0)
        } else {
            1.0
        }
    }

    /// Effective (broadened) gap of state `j` at field `b_t`, K: Δ − Γ, smoothly kept ≥ 0.
    pub fn effective_gap_k(&self, j: usize, b_t: f64) -> f64 {
        let gamma = self.broadening_k(j);
        softplus(
            self.states[j].gap.gap_k(b_t) - gamma,
            0.15 * gamma.max(1e-3),
        )
    }

    /// Plateau half-width of state `j` in density at field `b_t`, m⁻² (0 while it is closed).
    pub fn plateau_half_width(&self, j: usize, b_t: f64) -> f64 {
        let st = &self.states[j];
        let development = (self.effective_gap_k(j, b_t) / self.broadening_k(j).max(1e-3)).tanh();
        development
            * (st.width_flux * E_OVER_H * b_t.abs() + st.width_fixed_n0 * self.device.n0_m2())
    }

    /// Classical background conductivities (σ_xx, Hall conductance) in e²/h at density `n`
    /// (m⁻²) and field `b_t` (T); the Hall conductance is +ν for electrons at B > 0.
    fn background(&self, n: f64, b_t: f64) -> (f64, f64) {
        let d = &self.device;
        let n0 = d.n0_m2();
        // Carriers counted from the nearest Dirac point: main cone, or satellites at s = ±4.
        let (n_hall, mobility, puddle) = if n0 > 0.0 {
            let s = n / n0;
            let up = smooth_step(s - 2.0, CONE_CROSSOVER_S);
            let down = smooth_step(-s - 2.0, CONE_CROSSOVER_S);
            let sat = up + down;
            (
                n - 4.0 * n0 * up + 4.0 * n0 * down,
                d.mobility * (1.0 - sat) + d.satellite_mobility * sat,
                d.puddle_m2 * (1.0 - sat) + d.satellite_puddle_m2 * sat,
            )
        } else {
            (n, d.mobility, d.puddle_m2)
        };
        let mobility = mobility / self.disorder;
        let puddle = puddle * self.disorder;
        let n_eff = (n_hall * n_hall + puddle * puddle).sqrt();
        let mb = mobility * b_t;
        let denom = 1.0 + mb * mb;
        // n h μ / e is the Drude conductivity n e μ in units of e²/h.
        let per_flux = FLUX_QUANTUM_H_OVER_E * mobility;
        let mut sxx = n_eff * per_flux / denom + LEVEL_CONDUCTIVITY * mb * mb / denom;
        let hall = n_hall * per_flux * mb / denom;
        for bz in &self.brown_zak {
            let x = (b_t.abs() - bz.field_t) / BROWN_ZAK_WIDTH_T;
            sxx *= 1.0 + (0.8 / bz.q as f64) * (-x * x).exp();
        }
        (sxx, hall)
    }

    /// Conductivities (σ_xx, Hall conductance) in e²/h at density `n` (m⁻²) and field `b_t`
    /// (T), leaving out state `skip` if given (to measure that state's own contribution).
    pub fn conductivity(&self, n: f64, b_t: f64, skip: Option<usize>) -> (f64, f64) {
        let (mut sxx, mut hall) = self.background(n, b_t);
        for j in 0..self.states.len() {
            if Some(j) == skip {
                continue;
            }
            let w = self.plateau_half_width(j, b_t);
            if w <= 0.0 {
                continue;
            }
            let x = (n - self.line_density(j, b_t)) / w;
            if x.abs() > 3.0 {
                continue;
            }
            let st = &self.states[j];
            let n0 = self.device.n0_m2();
            let domain = if n0 > 0.0 {
                st.domain.weight(st.s.to_f64(), n / n0)
            } else {
                1.0
            };
            let profile = domain * (-(x * x) * (x * x)).exp();
            let depth = 1.0 - (-self.effective_gap_k(j, b_t) / (2.0 * self.temperature_k)).exp();
            let weight = depth * profile;
            sxx *= 1.0 - weight;
            hall += weight * (st.t.to_f64() - hall);
        }
        let floor = LEAKAGE_CONDUCTIVITY + INSULATOR_LEAKAGE * (-(hall / 0.3).powi(2)).exp();
        (sxx.max(floor), hall)
    }

    /// Resistivities (ρ_xx in Ω per square, ρ_xy in Ω) at density `n` and field `b_t`.
    pub fn resistivity(&self, n: f64, b_t: f64, skip: Option<usize>) -> (f64, f64) {
        let (g, h) = self.conductivity(n, b_t, skip);
        // σ = (e²/h)·[[g, −h], [h, g]] with σ_xy = −h e²/h; ρ = σ⁻¹.
        let d = g * g + h * h;
        (VON_KLITZING_R_K * g / d, VON_KLITZING_R_K * h / d)
    }

    /// Noiseless four-terminal resistances (R_xx = ρ_xx·L/W, R_xy = ρ_xy) in Ω at gate voltage
    /// `vg_v` (V) and field `b_t` (T).
    pub fn ideal(&self, vg_v: f64, b_t: f64) -> (f64, f64) {
        let (rxx, rxy) = self.resistivity(self.device.density(vg_v), b_t, None);
        (rxx * self.device.length_m / self.device.width_m, rxy)
    }

    /// R_xx (Ω) at density `n` and field `b_t`, with state `skip` left out if given.
    pub fn rxx_at_density(&self, n: f64, b_t: f64, skip: Option<usize>) -> f64 {
        self.resistivity(n, b_t, skip).0 * self.device.length_m / self.device.width_m
    }
}

#[cfg(test)]
mod tests {
    use super::super::device::{Device, DeviceName};
    use super::*;

    #[test]
    fn tensor_inversion_follows_the_stated_sign_convention() {
        // check-values §12: ρ_xx = 1000 Ω, ρ_xy = 5000 Ω ↔ σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²)
        // = −1.923 076 923×10⁻⁴ S. Here: σ in e²/h → ρ, then back by the closed form.
        let m = Model::new(Device::of(DeviceName::Wren), 1.6, 1.0);
        let (rxx, rxy) = m.resistivity(2e16, 9.0, None);
        let d = rxx * rxx + rxy * rxy;
        let (g, h) = m.conductivity(2e16, 9.0, None);
        let e2h = crate::constants::E2_OVER_H;
        assert!(((rxx / d) / (g * e2h) - 1.0).abs() < 1e-12);
        assert!(((-rxy / d) / (-h * e2h) - 1.0).abs() < 1e-12);
        assert!(rxy > 0.0, "electrons at B > 0 have R_xy > 0");
    }

    #[test]
    fn neutrality_and_full_filling_peaks_at_low_field() {
        let wren = Model::new(Device::of(DeviceName::Wren), 1.6, 1.0);
        let (peak, _) = wren.ideal(wren.device.v_cnp, 0.0);
        let (far, _) = wren.ideal(wren.device.v_cnp + 30.0, 0.0);
        assert!(peak > 10.0 * far, "CNP {peak} vs {far}");
        let tern = Model::new(Device::of(DeviceName::Tern), 1.5, 1.0);
        let n0 = tern.device.n0_m2();
        for s in [-4.0, 4.0] {
            let at = tern.rxx_at_density(s * n0, 0.0, None);
            let beside = tern.rxx_at_density((s - s.signum() * 0.8) * n0, 0.0, None);
            assert!(at > 5.0 * beside, "s = {s}: {at} vs {beside}");
        }
    }

    #[test]
    fn brown_zak_fields_are_fractions_of_one_flux_per_cell() {
        let tern = Model::new(Device::of(DeviceName::Tern), 1.5, 1.0);
        let m = tern.device.moire.unwrap();
        let area = m.cell_area_m2();
        for bz in &tern.brown_zak {
            // φ/φ₀ = B·A/(h/e) = 1/q with φ₀ = h/e (check-values §1, §14 pitfall 1).
            let ratio = bz.field_t * area / (6.626_070_15e-34 / 1.602_176_634e-19);
            assert!((ratio * bz.q as f64 - 1.0).abs() < 1e-12);
        }
        assert!(Model::new(Device::of(DeviceName::Wren), 1.6, 1.0)
            .brown_zak
            .is_empty());
    }
}

//! A dual-gated synthetic device at fixed field: `dunlin`, a Bernal-bilayer-like Hall bar
//! between two hBN dielectrics with graphite top and bottom gates, measured over (V_t, V_b).
//!
//! Model (conductivities in e²/h, at filling ν = n h/(eB) and displacement D/ε₀):
//! * a background σ_xx = 0.6 and Hall conductance ν;
//! * gapped states at ν = ±4, ±8, ±12, ±16 (bilayer Landau levels, gap independent of D), at
//!   ν = 0 (layer polarised, gap growing with |D|) and at ν = ±2 (opening only beyond a
//!   displacement threshold). Each multiplies σ_xx by 1 − depth·exp(−((ν−ν_j)/w)⁴) with
//!   depth = 1 − exp(−Δ/(2k_BT)) and pulls the Hall conductance toward ν_j by the same weight;
//! * a leakage floor; then ρ = σ⁻¹ and R_xx = ρ_xx L/W.
//!
//! Density and displacement follow [`DualGate`] (D/ε₀ positive when the top gate dominates).

use super::device::LAB_NAME;
use super::flaws::Noise;
use super::rng::SplitMix64;
use super::truth::round_sig;
use super::CSV_DIGITS;
use crate::constants::{E_OVER_H, VON_KLITZING_R_K};
use crate::error::{Error, Result};
use crate::gate::{Dielectric, DualGate};
use crate::io::write::long_csv_text;
use crate::map::{RawSweep, SweepDirection};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Column headers of the dual-gate CSV.
pub const DUAL_GATE_HEADERS: [&str; 3] = ["vt_V", "vb_V", "rxx_ohm"];
/// Format name of the dual-gate truth file.
pub const DUAL_GATE_TRUTH_FORMAT: &str = "fanmark-synth-dualgate-truth";

/// What to synthesise.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DualGateConfig {
    /// Seed of the noise.
    pub seed: u64,
    /// Top-gate range (min, max), V.
    #[serde(rename = "vt_range_V")]
    pub vt_range_v: (f64, f64),
    /// Bottom-gate range (min, max), V.
    #[serde(rename = "vb_range_V")]
    pub vb_range_v: (f64, f64),
    /// Top-gate points (swept).
    pub vt_points: usize,
    /// Bottom-gate points (stepped).
    pub vb_points: usize,
    /// Perpendicular field, T.
    #[serde(rename = "field_T")]
    pub field_t: f64,
    /// Temperature, K.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Gaussian noise.
    pub noise: Noise,
}

impl DualGateConfig {
    /// The demo map: 161 × 121 points at 6 T and 1.6 K.
    pub fn demo() -> DualGateConfig {
        DualGateConfig {
            seed: 6060,
            vt_range_v: (-3.0, 3.0),
            vb_range_v: (-5.0, 5.0),
            vt_points: 161,
            vb_points: 121,
            field_t: 6.0,
            temperature_k: 1.6,
            noise: Noise {
                on: true,
                abs_ohm: 3.0,
                rel: 0.002,
            },
        }
    }
}

/// The dual-gated device.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DualGateDevice {
    /// Stack, top to bottom.
    pub stack: String,
    /// Top dielectric.
    pub top: Dielectric,
    /// Bottom dielectric.
    pub bottom: Dielectric,
    /// Top-gate offset V_t0, V.
    pub v_top_offset: f64,
    /// Bottom-gate offset V_b0, V.
    pub v_bottom_offset: f64,
    /// Channel width, m.
    pub width_m: f64,
    /// Probe spacing, m.
    pub length_m: f64,
}

impl DualGateDevice {
    /// `dunlin`.
    pub fn dunlin() -> DualGateDevice {
        DualGateDevice {
            stack: "graphite top gate / hBN (25 nm, ε_r 3.4) / Bernal bilayer graphene / \
                    hBN (45 nm, ε_r 3.4) / graphite bottom gate"
                .into(),
            top: Dielectric {
                thickness_m: 25e-9,
                epsilon_r: 3.4,
            },
            bottom: Dielectric {
                thickness_m: 45e-9,
                epsilon_r: 3.4,
            },
            v_top_offset: 0.05,
            v_bottom_offset: -0.12,
            width_m: 1.2e-6,
            length_m: 2.4e-6,
        }
    }
    /// The two-gate model with the device's offsets.
    pub fn gate(&self) -> Result<DualGate> {
        let mut g = DualGate::from_dielectrics(&self.top, &self.bottom)?;
        g.v_top_offset = self.v_top_offset;
        g.v_bottom_offset = self.v_bottom_offset;
        Ok(g)
    }
}

/// One gapped state of the dual-gate device.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DualGateState {
    /// Filling factor ν.
    pub nu: Rational,
    /// Density of the state at the map's field, 10¹² cm⁻².
    pub density_1e12_cm2: f64,
    /// Gap at D = 0, K.
    #[serde(rename = "gap_at_zero_D_K")]
    pub gap_at_zero_d_k: f64,
    /// Gap growth with |D/ε₀|, K per V/nm.
    #[serde(rename = "gap_per_V_per_nm_K")]
    pub gap_per_v_per_nm_k: f64,
    /// |D/ε₀| below which the state has no gap, V/nm.
    #[serde(rename = "d_threshold_V_per_nm")]
    pub d_threshold_v_per_nm: f64,
    /// Plateau half-width, in ν.
    pub width_nu: f64,
}

impl DualGateState {
    /// Gap Δ in K at displacement D/ε₀ (V/m).
    pub fn gap_k(&self, d_v_per_m: f64) -> f64 {
        let d = (d_v_per_m.abs() * 1e-9 - self.d_threshold_v_per_nm).max(0.0);
        let on = if d_v_per_m.abs() * 1e-9 >= self.d_threshold_v_per_nm {
            self.gap_at_zero_d_k
        } else {
            0.0
        };
        on + self.gap_per_v_per_nm_k * d
    }
}

/// Truth of a dual-gate map.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DualGateTruth {
    /// Always [`DUAL_GATE_TRUTH_FORMAT`].
    pub format: String,
    /// Format version.
    pub version: u32,
    /// The invented lab.
    pub lab: String,
    /// Device name.
    pub device: String,
    /// Stack.
    pub stack: String,
    /// Top-gate capacitance per area, F/m².
    #[serde(rename = "c_top_F_per_m2")]
    pub c_top: f64,
    /// Bottom-gate capacitance per area, F/m².
    #[serde(rename = "c_bottom_F_per_m2")]
    pub c_bottom: f64,
    /// V_t0, V.
    #[serde(rename = "v_top_offset_V")]
    pub v_top_offset: f64,
    /// V_b0, V.
    #[serde(rename = "v_bottom_offset_V")]
    pub v_bottom_offset: f64,
    /// Field, T.
    #[serde(rename = "field_T")]
    pub field_t: f64,
    /// Temperature, K.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Sign convention of D.
    pub displacement_convention: String,
    /// The gapped states.
    pub states: Vec<DualGateState>,
    /// The configuration.
    pub config: DualGateConfig,
}

/// A generated dual-gate measurement.
#[derive(Debug, Clone, PartialEq)]
pub struct DualGateSynthesis {
    /// Top-gate sweeps at fixed bottom gate; one channel, R_xx in Ω.
    pub sweeps: Vec<RawSweep>,
    /// The truth.
    pub truth: DualGateTruth,
    /// The device.
    pub device: DualGateDevice,
}

impl DualGateSynthesis {
    /// Long-format CSV text, columns [`DUAL_GATE_HEADERS`].
    pub fn csv_text(&self) -> String {
        long_csv_text(&DUAL_GATE_HEADERS, &[1.0; 3], &self.sweeps, CSV_DIGITS)
    }
    /// Truth as pretty JSON ending in a newline.
    pub fn truth_json(&self) -> Result<String> {
        let mut s = serde_json::to_string_pretty(&self.truth)
            .map_err(|e| Error::invalid("truth", format!("could not be serialised: {e}")))?;
        s.push('\n');
        Ok(s)
    }
    /// Noiseless R_xx (Ω) at gate voltages (V).
    pub fn ideal(&self, vt: f64, vb: f64) -> Result<f64> {
        let g = self.device.gate()?;
        let (n, d) = g.density_displacement(vt, vb);
        Ok(rxx(
            &self.device,
            &self.truth.states,
            n,
            d,
            self.truth.field_t,
            self.truth.temperature_k,
        ))
    }
}

fn states(field_t: f64) -> Vec<DualGateState> {
    let mut v = Vec::new();
    let mk = |nu: i64, g0: f64, slope: f64, thr: f64, w: f64| DualGateState {
        nu: Rational::integer(nu),
        density_1e12_cm2: round_sig(nu as f64 * E_OVER_H * field_t / 1e16, 9),
        gap_at_zero_d_k: g0,
        gap_per_v_per_nm_k: slope,
        d_threshold_v_per_nm: thr,
        width_nu: w,
    };
    for n in 1..=4i64 {
        for sign in [1, -1] {
            v.push(mk(sign * 4 * n, 60.0 / n as f64, 0.0, 0.0, 0.9));
        }
    }
    v.push(mk(0, 4.0, 120.0, 0.0, 0.7));
    for sign in [1, -1] {
        v.push(mk(sign * 2, 2.0, 90.0, 0.12, 0.35));
    }
    v
}

fn rxx(dev: &DualGateDevice, st: &[DualGateState], n: f64, d: f64, b: f64, t: f64) -> f64 {
    let nu = n / (E_OVER_H * b);
    let mut sxx = 0.6;
    let mut hall = nu;
    for s in st {
        let x = (nu - s.nu.to_f64()) / s.width_nu;
        if x.abs() > 3.0 {
            continue;
        }
        let depth = 1.0 - (-s.gap_k(d) / (2.0 * t)).exp();
        let w = depth * (-(x * x) * (x * x)).exp();
        sxx *= 1.0 - w;
        hall += w * (s.nu.to_f64() - hall);
    }
    let sxx = sxx.max(1e-3 + 0.02 * (-(hall / 0.3).powi(2)).exp());
    let rho = VON_KLITZING_R_K * sxx / (sxx * sxx + hall * hall);
    rho * dev.length_m / dev.width_m
}

/// Generate the dual-gate map of `dunlin` described by `cfg`.
pub fn generate_dual_gate(cfg: &DualGateConfig) -> Result<DualGateSynthesis> {
    let bad =
        |what: &str, msg: String| Err(Error::invalid(format!("dual-gate config {what}"), msg));
    if cfg.vt_points < 2 || cfg.vb_points < 2 {
        return bad("points", "need at least 2 per gate".into());
    }
    if cfg.vt_points.saturating_mul(cfg.vb_points) > super::config::MAX_POINTS {
        return bad("points", "too many points".into());
    }
    for (what, (a, b)) in [
        ("vt_range_V", cfg.vt_range_v),
        ("vb_range_V", cfg.vb_range_v),
    ] {
        if !(a.is_finite() && b.is_finite() && a < b) {
            return bad(what, format!("({a}, {b}): need finite min < max"));
        }
    }
    if !(cfg.field_t.is_finite() && cfg.field_t != 0.0) {
        return bad(
            "field_T",
            format!("{}: need a finite non-zero field", cfg.field_t),
        );
    }
    if !(cfg.temperature_k > 0.0 && cfg.temperature_k.is_finite()) {
        return bad("temperature_K", format!("{}: need > 0", cfg.temperature_k));
    }
    let dev = DualGateDevice::dunlin();
    let gate = dev.gate()?;
    let st = states(cfg.field_t);
    let mut rng = SplitMix64::new(cfg.seed);
    let step = |(a, b): (f64, f64), k: usize, i: usize| a + (b - a) * i as f64 / (k - 1) as f64;
    let mut sweeps = Vec::with_capacity(cfg.vb_points);
    for j in 0..cfg.vb_points {
        let vb = step(cfg.vb_range_v, cfg.vb_points, j);
        let mut swept = Vec::with_capacity(cfg.vt_points);
        let mut vals = Vec::with_capacity(cfg.vt_points);
        for i in 0..cfg.vt_points {
            let vt = step(cfg.vt_range_v, cfg.vt_points, i);
            let (n, d) = gate.density_displacement(vt, vb);
            let mut r = rxx(&dev, &st, n, d, cfg.field_t, cfg.temperature_k);
            if cfg.noise.on {
                r += cfg.noise.sigma(r) * rng.normal();
            }
            swept.push(vt);
            vals.push(r);
        }
        sweeps.push(RawSweep {
            step_value: vb,
            direction: SweepDirection::Up,
            first_line: 0,
            swept,
            values: vec![vals],
        });
    }
    let truth = DualGateTruth {
        format: DUAL_GATE_TRUTH_FORMAT.into(),
        version: 1,
        lab: LAB_NAME.into(),
        device: "dunlin".into(),
        stack: dev.stack.clone(),
        c_top: gate.c_top_f_per_m2,
        c_bottom: gate.c_bottom_f_per_m2,
        v_top_offset: dev.v_top_offset,
        v_bottom_offset: dev.v_bottom_offset,
        field_t: cfg.field_t,
        temperature_k: cfg.temperature_k,
        displacement_convention: "n = (C_t(V_t−V_t0) + C_b(V_b−V_b0))/e; D/ε₀ = (C_t(V_t−V_t0) − \
                                  C_b(V_b−V_b0))/(2ε₀), positive when the top gate dominates"
            .into(),
        states: st,
        config: cfg.clone(),
    };
    Ok(DualGateSynthesis {
        sweeps,
        truth,
        device: dev,
    })
}

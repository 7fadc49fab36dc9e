//! Synthetic devices with known truth: Landau-fan maps of invented devices, measured with
//! realistic flaws, together with a truth file saying where every gap is.
//!
//! # Devices
//! Two devices of the fictitious Skerry Bay cryogenic transport lab ([`DeviceName`]):
//! `wren`, a monolayer graphene Hall bar on 285 nm SiO₂ (integer, symmetry-broken and
//! composite-fermion states), and `tern`, hBN-encapsulated graphene aligned to hBN (moiré:
//! satellite fans, Wannier lines with integer and fractional (t, s), Brown–Zak features).
//!
//! # Transport model ([`Model`])
//! Density n = α(V_g − V_CNP). Conductivities are built in units of e²/h:
//! * a classical Drude background, σ_xx = n_eff e μ/(1+(μB)²) + σ_L (μB)²/(1+(μB)²) and Hall
//!   conductance n e μ·μB/(1+(μB)²), with n counted from the nearest Dirac point (the main cone,
//!   or the satellite cones at s = ±4 beyond |s| = 2), n_eff = √(n² + n_puddle²) giving the
//!   charge-neutrality and full-filling peaks, and σ_L ≈ 0.4 e²/h the conductivity of a
//!   half-filled Landau level;
//! * each state j is a line n_j(B) = t_j(e/h)B + s_j n₀ with an intrinsic gap Δ_j(B)
//!   ([`GapLaw`]: Dirac Landau-level spacing, Coulomb-like √B, linear, or constant) reduced by a
//!   disorder broadening Γ (Δ_eff = Δ − Γ, smoothly ≥ 0). Within a flat-bottomed profile
//!   exp(−(δn/w)⁴) of half-width w ∝ tanh(Δ_eff/Γ)·(e/h)|B|, σ_xx is multiplied by
//!   1 − D·profile and the Hall conductance pulled toward t_j by the same weight, with depth
//!   D = 1 − exp(−Δ_eff/(2k_BT));
//! * Brown–Zak features raise σ_xx in narrow bands around B = (1/q)φ₀/A;
//! * a small leakage floor keeps σ_xx > 0. The tensor is inverted to ρ and R_xx = ρ_xx·L/W,
//!   R_xy = ρ_xy, so a plateau has R_xy = +R_K/ν for ν > 0 (σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²)).
//!
//! The model only has to look realistic and be right about where the gaps are.
//!
//! # Flaws and truth
//! [`Flaws`] adds noise, drift, misalignment, up/down sweeps with hysteresis, gate jitter, an
//! aborted sweep, a repeated field, non-uniform field steps, a NaN stretch and glitches, all
//! deterministic from the seed ([`rng::SplitMix64`]). [`Truth`] lists every state with its
//! onset field (where its R_xx feature exceeds 3× the noise).

pub mod config;
pub mod device;
pub mod dualgate;
pub mod flaws;
pub mod model;
pub mod rng;
pub mod series;
pub mod states;
pub mod truth;

pub use config::SynthConfig;
pub use device::{Device, DeviceName, Moire, LAB_NAME};
pub use flaws::{Flaw, FlawLog, Flaws, Noise};
pub use model::{BrownZak, Model};
pub use states::{Domain, GapLaw, StateKind, SynthState};
pub use truth::{Truth, TruthState};

use crate::error::{Error, Result};
use crate::io::write::{long_csv_text, write_atomic};
use crate::map::RawSweep;
use std::path::{Path, PathBuf};

/// Column headers of the synthetic CSV: swept gate, stepped field, R_xx, R_xy.
pub const HEADERS: [&str; 4] = ["vg_V", "b_T", "rxx_ohm", "rxy_ohm"];
/// Significant digits written to the CSV.
pub const CSV_DIGITS: usize = 7;

/// A generated measurement: the sweeps as measured, their headers, the truth and the model.
#[derive(Debug, Clone, PartialEq)]
pub struct Synthesis {
    /// Gate sweeps at fixed field in measurement order; channels R_xx, R_xy in Ω.
    pub sweeps: Vec<RawSweep>,
    /// Column headers, [`HEADERS`].
    pub headers: Vec<String>,
    /// The known truth.
    pub truth: Truth,
    /// The noiseless model the sweeps were measured from.
    pub model: Model,
}

impl Synthesis {
    /// Noiseless (R_xx, R_xy) in Ω at gate `vg_v` (V) and field `b_t` (T), without any flaw.
    pub fn ideal(&self, vg_v: f64, b_t: f64) -> (f64, f64) {
        self.model.ideal(vg_v, b_t)
    }

    /// The long-format CSV text (7 significant digits).
    pub fn csv_text(&self) -> String {
        let h: Vec<&str> = self.headers.iter().map(|s| s.as_str()).collect();
        long_csv_text(&h, &[1.0; 4], &self.sweeps, CSV_DIGITS)
    }

    /// The truth as pretty JSON text, ending in a newline.
    pub fn truth_json(&self) -> Result<String> {
        let mut s = serde_json::to_string_pretty(&self.truth)
            .map_err(|e| Error::invalid("truth", format!("could not be serialised: {e}")))?;
        s.push('\n');
        Ok(s)
    }
}

/// Generate the measurement described by `cfg`.
pub fn generate(cfg: &SynthConfig) -> Result<Synthesis> {
    cfg.validate()?;
    let device = Device::of(cfg.device);
    let model = Model::new(device, cfg.temperature_k, cfg.disorder);
    let warp = cfg
        .flaws
        .field_step_warp
        .on
        .then_some(cfg.flaws.field_step_warp.size);
    let fields = flaws::field_values(
        cfg.field_range_t.0,
        cfg.field_range_t.1,
        cfg.field_points,
        warp,
    );
    let schedule = flaws::Schedule {
        gate_range_v: cfg.gate_range_v,
        gate_points: cfg.gate_points,
        fields_t: fields,
        noise: cfg.noise,
        flaws: &cfg.flaws,
        seed: cfg.seed,
    };
    let (sweeps, log) = flaws::measure(&model, &schedule);
    let truth = truth::build_truth(&model, cfg, log);
    Ok(Synthesis {
        sweeps,
        headers: HEADERS.iter().map(|s| s.to_string()).collect(),
        truth,
        model,
    })
}

/// The truth file that belongs to a CSV: the CSV's stem + `.truth.json`, beside it.
pub fn truth_path_for(csv_path: &Path) -> PathBuf {
    let stem = csv_path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_else(|| "synth".into());
    csv_path.with_file_name(format!("{stem}.truth.json"))
}

/// Write the CSV atomically.
pub fn write_csv(path: &Path, synthesis: &Synthesis) -> Result<()> {
    write_atomic(path, synthesis.csv_text().as_bytes())
}

/// Write the truth JSON (pretty) atomically.
pub fn write_truth(path: &Path, synthesis: &Synthesis) -> Result<()> {
    write_atomic(path, synthesis.truth_json()?.as_bytes())
}

#[cfg(test)]
mod tests;

//! Temperature series: the same synthetic device measured at several temperatures, so that the
//! R_xx minima of its states are thermally activated, with the gap each state has at a chosen
//! field recorded as truth.
//!
//! In the transport model the minimum of state j scales as 1 − depth = exp(−Δ_eff/(2k_BT)) with
//! Δ_eff = Δ − Γ the broadened gap, between a leakage floor at low T and the loss of
//! quantisation as k_BT approaches Δ_eff. The truth's `activation_gap_K` is that Δ_eff.

use super::config::SynthConfig;
use super::flaws::Flaws;
use super::model::Model;
use super::rng::SplitMix64;
use super::{generate, Device, DeviceName, Synthesis, CSV_DIGITS};
use crate::error::{Error, Result};
use crate::io::write::{long_csv_text, write_atomic};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};
use std::path::Path;

/// Column headers of a temperature-series CSV: the synthetic headers plus the temperature.
pub const SERIES_HEADERS: [&str; 5] = ["vg_V", "b_T", "rxx_ohm", "rxy_ohm", "T_K"];

/// The activation gap a state has at one field: what an Arrhenius fit should recover.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ActivationTruth {
    /// Slope t of the state's line (e/h).
    pub t: Rational,
    /// Intercept s of the state's line (n₀).
    pub s: Rational,
    /// Field, T.
    #[serde(rename = "b_T")]
    pub b_t: f64,
    /// Gap seen by activation, Δ_eff = Δ − Γ (smoothly ≥ 0), K, in the convention
    /// R_xx ∝ exp(−Δ/(2k_BT)).
    #[serde(rename = "activation_gap_K")]
    pub activation_gap_k: f64,
    /// Intrinsic gap Δ before broadening, K.
    #[serde(rename = "intrinsic_gap_K")]
    pub intrinsic_gap_k: f64,
    /// Disorder broadening Γ, K.
    #[serde(rename = "broadening_K")]
    pub broadening_k: f64,
}

/// A temperature series: one synthesis per temperature and the gaps of the probed states.
#[derive(Debug, Clone, PartialEq)]
pub struct TemperatureSeries {
    /// Temperatures, K, in the order given.
    pub temperatures_k: Vec<f64>,
    /// One measurement per temperature (seed varied so the noise differs).
    pub syntheses: Vec<Synthesis>,
    /// The activation gap of each probed (t, s, B).
    pub gaps: Vec<ActivationTruth>,
}

/// The activation truth of state (t, s) of `model` at field `b_t` (T); errors if the device has
/// no such state.
pub fn activation_truth(
    model: &Model,
    t: Rational,
    s: Rational,
    b_t: f64,
) -> Result<ActivationTruth> {
    let j = model
        .states
        .iter()
        .position(|st| st.t == t && st.s == s)
        .ok_or_else(|| {
            Error::invalid(
                "state",
                format!(
                    "the device {} has no state (t, s) = ({t}, {s})",
                    model.device.name
                ),
            )
        })?;
    Ok(ActivationTruth {
        t,
        s,
        b_t,
        activation_gap_k: model.effective_gap_k(j, b_t),
        intrinsic_gap_k: model.states[j].gap.gap_k(b_t),
        broadening_k: model.broadening_k(j),
    })
}

/// The measurement a series repeats: the device's demo map with noise but without the flaws
/// that add a temperature-independent resistance (misalignment, drift) or break the grid.
/// The noise is that of a low-resistance lock-in measurement (0.3 Ω + 0.2 %).
pub fn series_config(device: DeviceName) -> SynthConfig {
    let mut c = SynthConfig::demo(device);
    c.flaws = Flaws::none();
    c.noise.abs_ohm = 0.3;
    c.noise.rel = 0.002;
    c
}

/// Temperatures (K) of the demo series of the monolayer device, for the ν = 6 Landau gap at
/// [`DEMO_FIELD_T`] (≈ 335 K after broadening): 25–240 K.
pub const DEMO_TEMPERATURES_K: [f64; 10] = [
    25.0, 30.0, 40.0, 50.0, 65.0, 80.0, 100.0, 130.0, 170.0, 240.0,
];
/// Field (T) of the demo activation gap: a field row of the demo map.
pub const DEMO_FIELD_T: f64 = 7.0;

/// Generate `cfg` at each temperature in `temperatures_k` (each > 0), with the activation truth
/// of each probe (t, s, B in T).
pub fn temperature_series(
    cfg: &SynthConfig,
    temperatures_k: &[f64],
    probes: &[(Rational, Rational, f64)],
) -> Result<TemperatureSeries> {
    if temperatures_k.is_empty() {
        return Err(Error::invalid(
            "temperature series",
            "needs at least one temperature",
        ));
    }
    let mut seeds = SplitMix64::substream(cfg.seed, 0x7E3F);
    let mut syntheses = Vec::with_capacity(temperatures_k.len());
    for &t in temperatures_k {
        let mut c = cfg.clone();
        c.temperature_k = t;
        c.seed = seeds.next_u64();
        syntheses.push(generate(&c)?);
    }
    let base = Model::new(Device::of(cfg.device), cfg.temperature_k, cfg.disorder);
    let gaps = probes
        .iter()
        .map(|&(t, s, b)| activation_truth(&base, t, s, b))
        .collect::<Result<Vec<_>>>()?;
    Ok(TemperatureSeries {
        temperatures_k: temperatures_k.to_vec(),
        syntheses,
        gaps,
    })
}

/// The long-format CSV of one synthesis with a constant `T_K` column.
pub fn csv_text_with_temperature(s: &Synthesis) -> String {
    let t = s.truth.temperature_k;
    let sweeps: Vec<_> = s
        .sweeps
        .iter()
        .map(|sw| {
            let mut sw = sw.clone();
            sw.values.push(vec![t; sw.swept.len()]);
            sw
        })
        .collect();
    long_csv_text(&SERIES_HEADERS, &[1.0; 5], &sweeps, CSV_DIGITS)
}

/// Write each map of the series to `dir/{stem}-{T}K.csv` (with a `T_K` column) and the gaps to
/// `dir/{stem}.gaps.json`; returns the CSV paths in temperature order.
pub fn write_series(
    dir: &Path,
    stem: &str,
    series: &TemperatureSeries,
) -> Result<Vec<std::path::PathBuf>> {
    let mut paths = Vec::new();
    for s in &series.syntheses {
        let p = dir.join(format!("{stem}-{}K.csv", s.truth.temperature_k));
        write_atomic(&p, csv_text_with_temperature(s).as_bytes())?;
        paths.push(p);
    }
    let json = serde_json::to_string_pretty(&series.gaps)
        .map_err(|e| Error::invalid("series truth", format!("could not be serialised: {e}")))?;
    write_atomic(&dir.join(format!("{stem}.gaps.json")), json.as_bytes())?;
    Ok(paths)
}

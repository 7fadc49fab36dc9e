//! What to synthesise: device, seed, size, noise, disorder, ranges and flaws.

use super::device::{Device, DeviceName};
use super::flaws::{Flaw, Flaws, Noise};
use super::rng::SplitMix64;
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// Largest map the generator accepts (gate points × field points).
pub const MAX_POINTS: usize = 20_000_000;

/// Configuration of one synthetic measurement.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SynthConfig {
    /// Which device.
    pub device: DeviceName,
    /// Seed of every random choice.
    pub seed: u64,
    /// Nominal gate points per sweep.
    pub gate_points: usize,
    /// Field values (sweeps), before any repeated field.
    pub field_points: usize,
    /// Gate range (min, max), V.
    #[serde(rename = "gate_range_V")]
    pub gate_range_v: (f64, f64),
    /// Field range (min, max), T.
    #[serde(rename = "field_range_T")]
    pub field_range_t: (f64, f64),
    /// Sample temperature, K.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Disorder relative to the device's nominal (1 = nominal).
    pub disorder: f64,
    /// Gaussian noise.
    pub noise: Noise,
    /// Measurement flaws.
    pub flaws: Flaws,
}

impl SynthConfig {
    /// The small demo measurement of a device (files of ~1–2 MB), every flaw on and modest.
    pub fn demo(device: DeviceName) -> SynthConfig {
        let d = Device::of(device);
        let (gate_points, field_points, seed) = match device {
            DeviceName::Wren => (481, 101, 2024),
            DeviceName::Tern => (401, 129, 4049),
        };
        SynthConfig {
            device,
            seed,
            gate_points,
            field_points,
            gate_range_v: d.gate_range_v,
            field_range_t: d.field_range_t,
            temperature_k: d.temperature_k,
            disorder: 1.0,
            noise: Noise {
                on: true,
                abs_ohm: 3.0,
                rel: 0.002,
            },
            flaws: Flaws::all_on(),
        }
    }

    /// A measurement of `device` with noise, disorder, ranges, size and flaws drawn at random
    /// from `seed` within sensible bounds (for testing analysis code on many maps).
    pub fn varied(device: DeviceName, seed: u64) -> SynthConfig {
        let d = Device::of(device);
        let mut g = SplitMix64::substream(seed, 0x5EED);
        let (glo, ghi) = d.gate_range_v;
        // The moiré device keeps full filling (s = ±4) inside the range.
        let shrink_lo = if d.moire.is_some() { 0.85 } else { 0.6 };
        let gate_range_v = (glo * g.range(shrink_lo, 1.0), ghi * g.range(shrink_lo, 1.0));
        let (_, bhi) = d.field_range_t;
        let field_range_t = (
            if g.chance(0.5) {
                0.0
            } else {
                g.range(0.0, 1.0)
            },
            bhi * g.range(0.7, 1.0),
        );
        let mut flaws = Flaws::none();
        let draw = |flaw: &mut Flaw, lo: f64, hi: f64, g: &mut SplitMix64| {
            *flaw = Flaw {
                on: g.chance(0.5),
                size: g.range(lo, hi),
            };
        };
        draw(&mut flaws.drift_ohm, 0.5, 15.0, &mut g);
        draw(&mut flaws.misalignment_fraction, 0.001, 0.02, &mut g);
        draw(&mut flaws.hysteresis_v, 0.001, 0.01, &mut g);
        draw(&mut flaws.gate_jitter_steps, 0.02, 0.4, &mut g);
        draw(&mut flaws.aborted_keep_fraction, 0.2, 0.9, &mut g);
        draw(&mut flaws.repeated_field_count, 1.0, 3.0, &mut g);
        draw(&mut flaws.field_step_warp, 0.1, 0.8, &mut g);
        draw(&mut flaws.nan_stretch_points, 2.0, 40.0, &mut g);
        draw(&mut flaws.glitch_count, 1.0, 20.0, &mut g);
        SynthConfig {
            device,
            seed,
            gate_points: g.int_range(150, 420),
            field_points: g.int_range(50, 160),
            gate_range_v,
            field_range_t,
            temperature_k: g.range(0.3, 4.0),
            disorder: g.range(0.6, 1.6),
            noise: Noise {
                on: true,
                abs_ohm: g.range(0.5, 10.0),
                rel: g.range(0.0, 0.005),
            },
            flaws,
        }
    }

    /// Check every field; errors name the field and what was expected.
    pub fn validate(&self) -> Result<()> {
        let bad =
            |what: &str, msg: String| Err(Error::invalid(format!("synth config {what}"), msg));
        if self.gate_points < 2 {
            return bad(
                "gate_points",
                format!("{} given, need at least 2", self.gate_points),
            );
        }
        if self.field_points < 1 {
            return bad("field_points", "0 given, need at least 1".into());
        }
        if self.gate_points.saturating_mul(self.field_points) > MAX_POINTS {
            return bad(
                "size",
                format!(
                    "{}×{} points exceeds the limit of {MAX_POINTS}",
                    self.gate_points, self.field_points
                ),
            );
        }
        let (a, b) = self.gate_range_v;
        if !(a.is_finite() && b.is_finite() && a < b) {
            return bad("gate_range_V", format!("({a}, {b}): need finite min < max"));
        }
        let (a, b) = self.field_range_t;
        if !(a.is_finite() && b.is_finite() && a <= b) || (self.field_points > 1 && a == b) {
            return bad(
                "field_range_T",
                format!("({a}, {b}): need finite min < max"),
            );
        }
        if !(self.temperature_k.is_finite() && self.temperature_k > 0.0) {
            return bad("temperature_K", format!("{}: need > 0", self.temperature_k));
        }
        if !(self.disorder.is_finite() && self.disorder > 0.0) {
            return bad("disorder", format!("{}: need > 0", self.disorder));
        }
        if !(self.noise.abs_ohm >= 0.0 && self.noise.rel >= 0.0) {
            return bad("noise", "abs_ohm and rel must be ≥ 0".into());
        }
        let mut f = self.flaws;
        let names = [
            "drift_ohm",
            "misalignment_fraction",
            "hysteresis_v",
            "gate_jitter_steps",
            "aborted_keep_fraction",
            "repeated_field_count",
            "field_step_warp",
            "nan_stretch_points",
            "glitch_count",
        ];
        for (flaw, name) in f.all_mut().into_iter().zip(names) {
            if !flaw.size.is_finite() || flaw.size < 0.0 {
                return bad(
                    &format!("flaws.{name}"),
                    format!("{}: need a finite value ≥ 0", flaw.size),
                );
            }
        }
        let warp = self.flaws.field_step_warp.size;
        if self.flaws.field_step_warp.on && warp >= 1.0 {
            return bad(
                "flaws.field_step_warp",
                format!("{warp}: need < 1 so the field stays monotonic"),
            );
        }
        let jit = self.flaws.gate_jitter_steps.size;
        if self.flaws.gate_jitter_steps.on && jit >= 1.0 {
            return bad(
                "flaws.gate_jitter_steps",
                format!("{jit}: need < 1 gate step"),
            );
        }
        let keep = self.flaws.aborted_keep_fraction.size;
        if self.flaws.aborted_keep_fraction.on && !(keep > 0.0 && keep < 1.0) {
            return bad(
                "flaws.aborted_keep_fraction",
                format!("{keep}: need between 0 and 1"),
            );
        }
        Ok(())
    }
}

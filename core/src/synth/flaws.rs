//! Measurement flaws added to the noiseless model, each a switch with a magnitude, and the
//! sweep schedule (field steps, sweep order and direction, gate points) they act on.
//!
//! Every random choice comes from its own [`SplitMix64`] sub-stream of the seed, so a map is
//! reproducible and switching one flaw does not reshuffle the others.

use super::model::Model;
use super::rng::SplitMix64;
use crate::map::{RawSweep, SweepDirection};
use serde::{Deserialize, Serialize};

/// One flaw: whether it is applied, and its magnitude (unit given by the field that holds it).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Flaw {
    /// Applied when true.
    pub on: bool,
    /// Magnitude, in the unit named by the field holding this flaw.
    pub size: f64,
}

impl Flaw {
    /// A flaw switched on with magnitude `size`.
    pub const fn on(size: f64) -> Flaw {
        Flaw { on: true, size }
    }
    /// A flaw switched off (its magnitude kept for when it is switched on).
    pub const fn off(size: f64) -> Flaw {
        Flaw { on: false, size }
    }
}

/// Gaussian measurement noise: σ = abs_ohm + rel·|R| on each channel.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Noise {
    /// Applied when true.
    pub on: bool,
    /// Absolute part of σ, Ω.
    pub abs_ohm: f64,
    /// Relative part of σ (fraction of |R|).
    pub rel: f64,
}

impl Noise {
    /// Standard deviation (Ω) of the noise on a value `r` (Ω); the nominal level even when
    /// switched off, since it also sets the visibility threshold of the truth.
    pub fn sigma(&self, r: f64) -> f64 {
        self.abs_ohm + self.rel * r.abs()
    }
}

/// The measurement flaws. Field names carry the unit of each magnitude.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Flaws {
    /// Slow drift of both channels over the whole measurement, amplitude in Ω.
    pub drift_ohm: Flaw,
    /// Contact misalignment: this fraction of R_xy appears in R_xx.
    pub misalignment_fraction: Flaw,
    /// Alternate sweep directions; down sweeps show features shifted by this gate hysteresis
    /// (V) toward larger recorded gate voltage.
    pub hysteresis_v: Flaw,
    /// Per-point gate jitter, as a fraction of the nominal gate step (uniform ±size/2).
    pub gate_jitter_steps: Flaw,
    /// One aborted sweep keeping this fraction of its points.
    pub aborted_keep_fraction: Flaw,
    /// One field value measured this many extra times (rounded, at least 1).
    pub repeated_field_count: Flaw,
    /// Non-uniform field steps: relative amplitude of the step-size modulation (0…0.9).
    pub field_step_warp: Flaw,
    /// A stretch of this many consecutive NaN points in one sweep.
    pub nan_stretch_points: Flaw,
    /// This many single-point glitches (rounded).
    pub glitch_count: Flaw,
}

impl Flaws {
    /// Every flaw switched off (magnitudes at their demo values).
    pub fn none() -> Flaws {
        let mut f = Flaws::all_on();
        for flaw in f.all_mut() {
            flaw.on = false;
        }
        f
    }
    /// Every flaw on at a modest magnitude.
    pub fn all_on() -> Flaws {
        Flaws {
            drift_ohm: Flaw::on(4.0),
            misalignment_fraction: Flaw::on(0.004),
            hysteresis_v: Flaw::on(0.004),
            gate_jitter_steps: Flaw::on(0.1),
            aborted_keep_fraction: Flaw::on(0.55),
            repeated_field_count: Flaw::on(1.0),
            field_step_warp: Flaw::on(0.3),
            nan_stretch_points: Flaw::on(12.0),
            glitch_count: Flaw::on(6.0),
        }
    }
    /// Mutable access to every flaw, in declaration order.
    pub fn all_mut(&mut self) -> [&mut Flaw; 9] {
        [
            &mut self.drift_ohm,
            &mut self.misalignment_fraction,
            &mut self.hysteresis_v,
            &mut self.gate_jitter_steps,
            &mut self.aborted_keep_fraction,
            &mut self.repeated_field_count,
            &mut self.field_step_warp,
            &mut self.nan_stretch_points,
            &mut self.glitch_count,
        ]
    }
}

/// Where the randomly placed flaws ended up (indices into the sweeps in measurement order).
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct FlawLog {
    /// Index and field (T) of the aborted sweep.
    pub aborted_sweep: Option<(usize, f64)>,
    /// Field (T) that was measured more than once.
    #[serde(rename = "repeated_field_T")]
    pub repeated_field_t: Option<f64>,
    /// Sweep index, first point index and length of the NaN stretch.
    pub nan_stretch: Option<(usize, usize, usize)>,
    /// (sweep index, point index) of each glitch.
    pub glitches: Vec<(usize, usize)>,
}

// Sub-stream identifiers.
const S_JITTER: u64 = 1;
const S_NOISE: u64 = 2;
const S_DRIFT: u64 = 3;
const S_ABORT: u64 = 4;
const S_REPEAT: u64 = 5;
const S_NAN: u64 = 6;
const S_GLITCH: u64 = 7;

/// Field values in measurement order: `n` points from `lo` to `hi`, uniform or with the step
/// size modulated by `warp` (the ends are kept exactly).
pub fn field_values(lo: f64, hi: f64, n: usize, warp: Option<f64>) -> Vec<f64> {
    if n == 1 {
        return vec![lo];
    }
    (0..n)
        .map(|i| {
            let u = i as f64 / (n - 1) as f64;
            // u + a/(2π)·sin(2πu)·… : derivative 1 + a cos(2πu) > 0 for a < 1.
            let w = match warp {
                Some(a) => {
                    u + a / (2.0 * std::f64::consts::PI) * (2.0 * std::f64::consts::PI * u).sin()
                }
                None => u,
            };
            lo + (hi - lo) * w
        })
        .collect()
}

/// Everything the sweep generator needs besides the model.
pub struct Schedule<'a> {
    /// Gate range (min, max), V.
    pub gate_range_v: (f64, f64),
    /// Nominal gate points per sweep.
    pub gate_points: usize,
    /// Field values in measurement order, T.
    pub fields_t: Vec<f64>,
    /// Noise.
    pub noise: Noise,
    /// Flaws.
    pub flaws: &'a Flaws,
    /// Seed.
    pub seed: u64,
}

/// Measure the model along the schedule: returns the sweeps (gate swept at fixed field, in
/// measurement order, channels R_xx then R_xy in Ω) and where the flaws went.
pub fn measure(model: &Model, sch: &Schedule) -> (Vec<RawSweep>, FlawLog) {
    let f = sch.flaws;
    let mut log = FlawLog::default();
    let mut fields = sch.fields_t.clone();
    if f.repeated_field_count.on && fields.len() >= 3 {
        let mut g = SplitMix64::substream(sch.seed, S_REPEAT);
        let k = g.int_range(1, fields.len() - 2);
        let extra = (f.repeated_field_count.size.round() as usize).max(1);
        let b = fields[k];
        for _ in 0..extra {
            fields.insert(k + 1, b);
        }
        log.repeated_field_t = Some(b);
    }
    let n_sweeps = fields.len();
    let (g_lo, g_hi) = sch.gate_range_v;
    let ng = sch.gate_points.max(2);
    let step = (g_hi - g_lo) / (ng - 1) as f64;
    let aborted = if f.aborted_keep_fraction.on && n_sweeps >= 3 {
        let mut g = SplitMix64::substream(sch.seed, S_ABORT);
        Some(g.int_range(1, n_sweeps - 2))
    } else {
        None
    };
    let mut jitter = SplitMix64::substream(sch.seed, S_JITTER);
    let mut noise = SplitMix64::substream(sch.seed, S_NOISE);
    let mut drift_rng = SplitMix64::substream(sch.seed, S_DRIFT);
    let (phase, slope) = (
        drift_rng.range(0.0, 2.0 * std::f64::consts::PI),
        drift_rng.range(-1.0, 1.0),
    );
    let total_points = (n_sweeps * ng) as f64;
    let mut counter = 0usize;
    let mut sweeps = Vec::with_capacity(n_sweeps);
    for (k, &b) in fields.iter().enumerate() {
        let down = f.hysteresis_v.on && k % 2 == 1;
        let mut gates: Vec<f64> = (0..ng)
            .map(|i| {
                let nominal = g_lo + step * i as f64;
                if f.gate_jitter_steps.on {
                    nominal
                        + f.gate_jitter_steps.size.clamp(0.0, 0.9) * step * jitter.range(-0.5, 0.5)
                } else {
                    nominal
                }
            })
            .collect();
        if down {
            gates.reverse();
        }
        if Some(k) == aborted {
            let keep = ((f.aborted_keep_fraction.size.clamp(0.05, 0.95) * ng as f64).ceil()
                as usize)
                .clamp(2, ng - 1);
            gates.truncate(keep);
            log.aborted_sweep = Some((k, b));
        }
        let mut rxx = Vec::with_capacity(gates.len());
        let mut rxy = Vec::with_capacity(gates.len());
        for &vg in &gates {
            let effective = if down { vg - f.hysteresis_v.size } else { vg };
            let (mut xx, mut xy) = model.ideal(effective, b);
            if f.misalignment_fraction.on {
                xx += f.misalignment_fraction.size * xy;
            }
            if f.drift_ohm.on {
                let t = counter as f64 / total_points;
                let d = f.drift_ohm.size
                    * (0.6 * (2.0 * std::f64::consts::PI * 1.3 * t + phase).sin()
                        + 0.4 * slope * (2.0 * t - 1.0));
                xx += d;
                xy += 0.5 * d;
            }
            if sch.noise.on {
                xx += sch.noise.sigma(xx) * noise.normal();
                xy += sch.noise.sigma(xy) * noise.normal();
            }
            rxx.push(xx);
            rxy.push(xy);
            counter += 1;
        }
        sweeps.push(RawSweep {
            step_value: b,
            direction: if down {
                SweepDirection::Down
            } else {
                SweepDirection::Up
            },
            first_line: 0,
            swept: gates,
            values: vec![rxx, rxy],
        });
    }
    if f.nan_stretch_points.on && !sweeps.is_empty() {
        let mut g = SplitMix64::substream(sch.seed, S_NAN);
        let k = g.int_range(0, sweeps.len() - 1);
        let len_pts = sweeps[k].swept.len();
        let len = (f.nan_stretch_points.size.round() as usize).clamp(1, len_pts);
        let start = g.int_range(0, len_pts - len);
        for ch in &mut sweeps[k].values {
            for v in &mut ch[start..start + len] {
                *v = f64::NAN;
            }
        }
        log.nan_stretch = Some((k, start, len));
    }
    if f.glitch_count.on && !sweeps.is_empty() {
        let mut g = SplitMix64::substream(sch.seed, S_GLITCH);
        let count = f.glitch_count.size.round().max(0.0) as usize;
        for _ in 0..count {
            let k = g.int_range(0, sweeps.len() - 1);
            let i = g.int_range(0, sweeps[k].swept.len() - 1);
            let ch = g.int_range(0, 1);
            let v = &mut sweeps[k].values[ch][i];
            if v.is_nan() {
                continue;
            }
            let sign = if g.chance(0.5) { 1.0 } else { -1.0 };
            *v += sign * (0.5 * v.abs() + 50.0 * (sch.noise.abs_ohm + 1.0)) * g.range(1.0, 3.0);
            log.glitches.push((k, i));
        }
    }
    (sweeps, log)
}

//! The known truth of a synthetic map: device parameters and every state with where it is
//! visible, as serde JSON whose key names carry their units.

use super::config::SynthConfig;
use super::device::{DeviceName, LAB_NAME};
use super::flaws::FlawLog;
use super::model::Model;
use super::states::StateKind;
use crate::constants::VON_KLITZING_R_K;
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Format name written in every truth file.
pub const TRUTH_FORMAT: &str = "fanmark-synth-truth";
/// Version of the truth format.
pub const TRUTH_VERSION: u32 = 1;
/// Field points of the scan that finds each state's onset.
const ONSET_SCAN_POINTS: usize = 561;

/// Hall-bar geometry.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Geometry {
    /// Channel width W, µm.
    pub width_um: f64,
    /// Voltage-probe spacing L, µm.
    pub length_um: f64,
    /// W/L, the factor from R_xx to ρ_xx.
    pub w_over_l: f64,
}

/// One state of the truth.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TruthState {
    /// Kind of feature.
    pub kind: StateKind,
    /// Readable label, e.g. `ν = 2` or `(t, s) = (-1, 1)`.
    pub label: String,
    /// Slope t in e/h (null for a Brown–Zak feature).
    pub t: Option<Rational>,
    /// Intercept s in n₀ (null for a Brown–Zak feature).
    pub s: Option<Rational>,
    /// Filling factor ν, when s = 0.
    pub nu: Option<Rational>,
    /// Flux per moiré cell φ/φ₀ of a Brown–Zak feature.
    pub phi_over_phi0: Option<Rational>,
    /// Field of a Brown–Zak feature, T.
    #[serde(rename = "b_T")]
    pub b_t: Option<f64>,
    /// Intrinsic gap Δ at `b_max_T` (before disorder broadening), K.
    #[serde(rename = "gap_K")]
    pub gap_k: Option<f64>,
    /// Disorder broadening Γ subtracted from the gap, K.
    #[serde(rename = "broadening_K")]
    pub broadening_k: Option<f64>,
    /// Lowest field at which the state is resolvable (see `visible`); null if never.
    #[serde(rename = "b_onset_T")]
    pub b_onset_t: Option<f64>,
    /// Highest field of the map at which its line lies inside the gate range; null if never.
    #[serde(rename = "b_max_T")]
    pub b_max_t: Option<f64>,
    /// True if the state is visible in the map: resolvable in at least
    /// `MIN_RESOLVED_ROWS` (4) of the map's field rows (the fields as measured, warped steps
    /// included). A gap line is resolvable at a field
    /// when its line lies inside the gate range and its own domain, its plateau spans at least
    /// one gate step, its R_xx dip (or peak) exceeds 3× the noise, the noiseless σ_xx or R_xx
    /// sampled on the map's gate grid has a minimum within one gate step of the line that the
    /// noise cannot fill (on both sides the values rise more than 3× the noise above it before
    /// they fall that much below it), and no
    /// other state with
    /// such a dip at least as deep (relative to R_xx) lies within two gate steps in density
    /// (a sampled maximum must separate the two minima, or the weaker is hidden in the
    /// stronger). A line is told from a point feature only by its slope through several
    /// field rows. A Brown–Zak feature is visible when its field lies inside the field range.
    pub visible: bool,
}

/// Everything known about a synthetic map.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Truth {
    /// Always [`TRUTH_FORMAT`].
    pub format: String,
    /// Always [`TRUTH_VERSION`].
    pub version: u32,
    /// The (invented) lab.
    pub lab: String,
    /// Device name.
    pub device: DeviceName,
    /// Stack description.
    pub stack: String,
    /// Seed used.
    pub seed: u64,
    /// Gate lever arm α, cm⁻² V⁻¹.
    #[serde(rename = "alpha_cm2_per_V")]
    pub alpha_cm2_per_v: f64,
    /// Charge-neutrality gate voltage, V.
    #[serde(rename = "v_cnp_V")]
    pub v_cnp_v: f64,
    /// n₀ = 1/A, cm⁻² (null without a superlattice).
    pub n0_cm2: Option<f64>,
    /// Moiré wavelength, nm.
    pub lambda_nm: Option<f64>,
    /// Twist angle to hBN, degrees.
    pub twist_deg: Option<f64>,
    /// Lattice mismatch δ.
    pub lattice_mismatch: Option<f64>,
    /// Field of one flux quantum h/e per moiré cell, T.
    #[serde(rename = "one_flux_field_T")]
    pub one_flux_field_t: Option<f64>,
    /// Hall-bar geometry.
    pub geometry: Geometry,
    /// Sample temperature, K.
    #[serde(rename = "temperature_K")]
    pub temperature_k: f64,
    /// Relative disorder.
    pub disorder: f64,
    /// Hall sign convention of the CSV.
    pub hall_convention: String,
    /// Every state and feature.
    pub states: Vec<TruthState>,
    /// Where the flaws went.
    pub flaws_applied: FlawLog,
    /// The configuration that produced the map.
    pub config: SynthConfig,
}

/// Round to `digits` significant digits, so the truth text is stable and readable.
pub(crate) fn round_sig(x: f64, digits: i32) -> f64 {
    if x == 0.0 || !x.is_finite() {
        return x;
    }
    let e = x.abs().log10().floor() as i32;
    let scale = 10f64.powi(digits - 1 - e);
    (x * scale).round() / scale
}

fn label(t: Rational, s: Rational) -> String {
    if s.is_zero() {
        format!("ν = {t}")
    } else {
        format!("(t, s) = ({t}, {s})")
    }
}

/// Fewest field rows of the map in which a state must be resolvable to count as visible.
pub const MIN_RESOLVED_ROWS: usize = 4;
/// Smallest distance, in gate steps, from another open gap's line for a line to be resolved.
const MIN_SEPARATION_STEPS: f64 = 2.0;

/// Per state at field `b` (T): the relative depth of its own R_xx dip (or peak),
/// |R_with − R_without|/R_without, where its line lies inside the gate range and its domain
/// and the change exceeds 3× the noise; 0 elsewhere.
fn significant_dips(model: &Model, cfg: &SynthConfig, b: f64) -> Vec<f64> {
    let (g_lo, g_hi) = cfg.gate_range_v;
    (0..model.states.len())
        .map(|k| {
            let n = model.line_density(k, b);
            let vg = model.device.gate_for_density(n);
            if !(g_lo..=g_hi).contains(&vg) || model.domain_weight_on_line(k, b) < 0.5 {
                return 0.0;
            }
            let with = model.rxx_at_density(n, b, None);
            let without = model.rxx_at_density(n, b, Some(k));
            let d = (with - without).abs();
            if d > 3.0 * cfg.noise.sigma(without).max(0.5) {
                d / without.abs().max(1e-300)
            } else {
                0.0
            }
        })
        .collect()
}

/// True when state `j`'s gap is resolvable at field `b` given every state's `dips` there and
/// the map's noiseless row at that field; see [`TruthState::visible`].
fn resolvable(
    model: &Model,
    cfg: &SynthConfig,
    j: usize,
    b: f64,
    dips: &[f64],
    gate_step_density: f64,
    row: &SampledRow,
) -> bool {
    if dips[j] <= 0.0
        || 2.0 * model.plateau_half_width(j, b) < gate_step_density
        || !row.minimum_near(model, cfg, j)
    {
        return false;
    }
    let n = model.line_density(j, b);
    !(0..model.states.len()).any(|k| {
        k != j
            && dips[k] >= dips[j]
            && (model.line_density(k, b) - n).abs() < MIN_SEPARATION_STEPS * gate_step_density
    })
}

/// One field row of the map as the noiseless model gives it on the map's gate grid, with the
/// measurement noise of each value: each column made on first use.
struct SampledRow {
    b: f64,
    made: Vec<std::cell::OnceCell<Sample>>,
}

/// A quantity read from a [`Sample`] with the margin the noise sets: (value, 3× its noise).
type Reading = fn(&Sample) -> (f64, f64);

/// The noiseless values at one gate column: R_xx (Ω) and σ_xx (e²/h), each with its noise
/// (R_xx's in Ω; σ_xx's relative, carried over from the noise on R_xx and R_xy).
#[derive(Clone, Copy)]
struct Sample {
    rxx: f64,
    rxx_noise: f64,
    sxx: f64,
    sxx_rel_noise: f64,
}

impl SampledRow {
    fn new(b: f64, cols: usize) -> SampledRow {
        SampledRow {
            b,
            made: (0..cols).map(|_| std::cell::OnceCell::new()).collect(),
        }
    }

    /// The sample at gate column `c` (< the map's columns).
    fn at(&self, model: &Model, cfg: &SynthConfig, c: usize) -> Sample {
        *self.made[c].get_or_init(|| {
            let (g_lo, g_hi) = cfg.gate_range_v;
            let dv = (g_hi - g_lo) / (cfg.gate_points.max(2) - 1) as f64;
            let geometry = model.device.length_m / model.device.width_m;
            let n = model.device.density(g_lo + dv * c as f64);
            let (rho_xx, rho_xy) = model.resistivity(n, self.b, None);
            let d = rho_xx * rho_xx + rho_xy * rho_xy;
            let rxx = rho_xx * geometry;
            // σ_xx = ρ_xx/(ρ_xx² + ρ_xy²):
            // d ln σ_xx = (1 − 2ρ_xx²/D) d ln ρ_xx − (2ρ_xy²/D) d ln ρ_xy.
            let from_xx = (1.0 - 2.0 * rho_xx * rho_xx / d) * cfg.noise.sigma(rxx) / rxx.abs();
            let from_xy = 2.0 * rho_xy.abs() * cfg.noise.sigma(rho_xy) / d;
            Sample {
                rxx,
                rxx_noise: cfg.noise.sigma(rxx),
                sxx: VON_KLITZING_R_K * rho_xx / d,
                sxx_rel_noise: from_xx.hypot(from_xy),
            }
        })
    }

    /// True when the row shows a minimum of R_xx or σ_xx within one gate step of state `j`'s
    /// line at the row's field that the noise cannot fill: a sample no higher than its two neighbours from which,
    /// on both sides, the values rise more than 3× its noise above it before they fall more
    /// than that below it or the row ends. A flat-bottomed plateau is crossed to its walls;
    /// a dip on the steep flank of a stronger feature (an insulating peak, say) makes no such
    /// minimum and is not seen in a map, however much it changes the values there.
    fn minimum_near(&self, model: &Model, cfg: &SynthConfig, j: usize) -> bool {
        let b = self.b;
        let (g_lo, g_hi) = cfg.gate_range_v;
        let cols = cfg.gate_points;
        if cols < 3 {
            return false;
        }
        let dv = (g_hi - g_lo) / (cols - 1) as f64;
        let column = (model.device.gate_for_density(model.line_density(j, b)) - g_lo) / dv;
        if !column.is_finite() {
            return false;
        }
        let first = ((column - 1.0).ceil() as i64).max(1) as usize;
        let last = ((column + 1.0).floor() as i64).min(cols as i64 - 2);
        if last < first as i64 {
            return false;
        }
        let quantities: [Reading; 2] = [
            |s| (s.rxx, 3.0 * s.rxx_noise),
            |s| (s.sxx, 3.0 * s.sxx_rel_noise * s.sxx.abs()),
        ];
        let at = |c: usize| self.at(model, cfg, c);
        (first..=last as usize).any(|c| {
            quantities.iter().any(|f| {
                let (here, margin) = f(&at(c));
                let rises = |side: &mut dyn Iterator<Item = usize>| {
                    for k in side {
                        let v = f(&at(k)).0;
                        if v > here + margin {
                            return true;
                        }
                        if v < here - margin {
                            return false;
                        }
                    }
                    // The row ended first: no wall is seen on this side.
                    false
                };
                here <= f(&at(c - 1)).0
                    && here <= f(&at(c + 1)).0
                    && rises(&mut (0..c).rev())
                    && rises(&mut (c + 1..cols))
            })
        })
    }
}

/// Onset field, top field and the number of the map's field rows in which each state is
/// resolvable.
fn visibility(model: &Model, cfg: &SynthConfig) -> Vec<(Option<f64>, Option<f64>, usize)> {
    let (b_lo, b_hi) = cfg.field_range_t;
    let (g_lo, g_hi) = cfg.gate_range_v;
    let gate_step_density =
        model.device.alpha_m2_per_v() * (g_hi - g_lo) / (cfg.gate_points.max(2) - 1) as f64;
    let count = model.states.len();
    let inside = |j: usize, b: f64| {
        let vg = model.device.gate_for_density(model.line_density(j, b));
        (g_lo..=g_hi).contains(&vg) && model.domain_weight_on_line(j, b) >= 0.5
    };
    let mut out = vec![(None, None, 0usize); count];
    for i in 0..ONSET_SCAN_POINTS {
        let b = b_lo + (b_hi - b_lo) * i as f64 / (ONSET_SCAN_POINTS - 1) as f64;
        let dips = significant_dips(model, cfg, b);
        let row = SampledRow::new(b, cfg.gate_points.max(2));
        for (j, o) in out.iter_mut().enumerate() {
            if !inside(j, b) {
                continue;
            }
            o.1 = Some(b);
            if o.0.is_none() && resolvable(model, cfg, j, b, &dips, gate_step_density, &row) {
                o.0 = Some(b);
            }
        }
    }
    // The map's own field rows, as measured (non-uniform when the field steps are warped).
    let warp = cfg
        .flaws
        .field_step_warp
        .on
        .then_some(cfg.flaws.field_step_warp.size);
    for b in super::flaws::field_values(b_lo, b_hi, cfg.field_points.max(1), warp) {
        let dips = significant_dips(model, cfg, b);
        let row = SampledRow::new(b, cfg.gate_points.max(2));
        for (j, o) in out.iter_mut().enumerate() {
            if resolvable(model, cfg, j, b, &dips, gate_step_density, &row) {
                o.2 += 1;
            }
        }
    }
    out
}

/// Build the truth of a map made from `cfg` with `model`, given where the flaws went.
pub fn build_truth(model: &Model, cfg: &SynthConfig, log: FlawLog) -> Truth {
    let d = &model.device;
    let mut states = Vec::new();
    let vis = visibility(model, cfg);
    for (j, st) in model.states.iter().enumerate() {
        let (onset, top, resolved_rows) = vis[j];
        states.push(TruthState {
            kind: st.kind,
            label: label(st.t, st.s),
            t: Some(st.t),
            s: Some(st.s),
            nu: st.s.is_zero().then_some(st.t),
            phi_over_phi0: None,
            b_t: None,
            gap_k: top.map(|b| round_sig(st.gap.gap_k(b), 6)),
            broadening_k: Some(round_sig(model.broadening_k(j), 6)),
            b_onset_t: onset.map(|b| round_sig(b, 6)),
            b_max_t: top.map(|b| round_sig(b, 6)),
            visible: onset.is_some() && resolved_rows >= MIN_RESOLVED_ROWS,
        });
    }
    let (b_lo, b_hi) = cfg.field_range_t;
    for bz in &model.brown_zak {
        let inside = (b_lo..=b_hi).contains(&bz.field_t);
        let b = round_sig(bz.field_t, 7);
        states.push(TruthState {
            kind: StateKind::BrownZak,
            label: format!("φ/φ₀ = 1/{}", bz.q),
            t: None,
            s: None,
            nu: None,
            phi_over_phi0: Rational::new(1, bz.q).ok(),
            b_t: Some(b),
            gap_k: None,
            broadening_k: None,
            b_onset_t: inside.then_some(b),
            b_max_t: inside.then_some(b),
            visible: inside,
        });
    }
    Truth {
        format: TRUTH_FORMAT.into(),
        version: TRUTH_VERSION,
        lab: LAB_NAME.into(),
        device: d.name,
        stack: d.stack.clone(),
        seed: cfg.seed,
        alpha_cm2_per_v: round_sig(d.alpha_m2_per_v() / 1e4, 9),
        v_cnp_v: d.v_cnp,
        n0_cm2: d.moire.map(|m| round_sig(m.n0_m2() / 1e4, 9)),
        lambda_nm: d.moire.map(|m| round_sig(m.wavelength_m() * 1e9, 9)),
        twist_deg: d.moire.map(|m| m.twist_deg),
        lattice_mismatch: d.moire.map(|m| m.mismatch),
        one_flux_field_t: d.moire.map(|m| round_sig(m.one_flux_field_t(), 9)),
        geometry: Geometry {
            width_um: round_sig(d.width_m * 1e6, 9),
            length_um: round_sig(d.length_m * 1e6, 9),
            w_over_l: round_sig(d.width_m / d.length_m, 9),
        },
        temperature_k: cfg.temperature_k,
        disorder: cfg.disorder,
        hall_convention: "R_xy = +R_K/ν on a plateau with ν > 0 (electrons, B > 0); \
                          σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²)"
            .into(),
        states,
        flaws_applied: log,
        config: cfg.clone(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::synth::device::Device;

    /// The wren demo model and configuration, and the index of its ν = 2 state.
    fn wren() -> (Model, SynthConfig, usize) {
        let cfg = SynthConfig::demo(DeviceName::Wren);
        let model = Model::new(Device::of(cfg.device), cfg.temperature_k, cfg.disorder);
        let j = model
            .states
            .iter()
            .position(|s| s.t == Rational::integer(2) && s.s.is_zero())
            .expect("ν = 2 is in the wren fan");
        (model, cfg, j)
    }

    #[test]
    fn a_flat_bottomed_plateau_is_a_minimum_the_noise_cannot_fill() {
        let (model, cfg, j) = wren();
        let b = 10.0;
        let (g_lo, g_hi) = cfg.gate_range_v;
        let step = model.device.alpha_m2_per_v() * (g_hi - g_lo) / (cfg.gate_points - 1) as f64;
        // At 10 T the ν = 2 plateau is many gate steps wide: the walk crosses its flat bottom
        // to the walls.
        assert!(2.0 * model.plateau_half_width(j, b) > 4.0 * step);
        let row = SampledRow::new(b, cfg.gate_points);
        assert!(row.minimum_near(&model, &cfg, j));
        // With a noise of 1 TΩ, 3× the noise is more than any wall of R_xx or σ_xx: not seen.
        let mut noisy = cfg.clone();
        noisy.noise.abs_ohm = 1e12;
        let row = SampledRow::new(b, cfg.gate_points);
        assert!(!row.minimum_near(&model, &noisy, j));
    }
}

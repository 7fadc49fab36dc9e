//! The whole indexing job on one map: calibration (unless given), gap-strength map, minima,
//! line scoring over the stack's families, suppression, Hall cross-check and classification.

use super::calibrate::{calibrate_map, moire_density, Calibration, MoireEstimate};
use super::features::{find_minima, gap_map, median, sigma_xy_e2h, GapMapOptions};
use super::score::{score_lines, suppress_neighbours, ScoreOptions};
use super::stack::Stack;
use crate::constants::E_OVER_H;
use crate::error::Result;
use crate::gate::Dielectric;
use crate::map::Map;
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Kind of an indexed state.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StateClass {
    /// In the stack's degenerate integer sequence (s = 0).
    Integer,
    /// Integer ν outside the degenerate sequence (s = 0).
    BrokenSymmetry,
    /// s = 0 and non-integer t.
    Fractional,
    /// s ≠ 0 (flags: `fractional_s`, `fractional_t`).
    Wannier,
}

/// Agreement of the Hall plateau along a line with t·e²/h.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct HallCheck {
    /// Median |σ_xy| along the seen part of the line, e²/h (sign fixed so σ_xy grows with n).
    pub sigma_xy_e2h: f64,
    /// Expected t.
    pub expected_e2h: f64,
    /// `agrees`, `contradicts` or `no_plateau`.
    pub verdict: String,
}

/// One indexed state.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IndexedState {
    /// Classification.
    pub kind: StateClass,
    /// Slope t as "p/q".
    pub t: Rational,
    /// Intercept s as "p/q".
    pub s: Rational,
    /// ν when s = 0.
    pub nu: Option<Rational>,
    /// Mean matched-filter contrast (row-noise units).
    pub score: f64,
    /// Its t-statistic.
    pub t_stat: f64,
    /// Lowest field where the line is seen, T.
    #[serde(rename = "b_onset_T")]
    pub b_onset_t: Option<f64>,
    /// Highest field where the line is seen, T.
    #[serde(rename = "b_max_T")]
    pub b_max_t: Option<f64>,
    /// Hall cross-check (null without R_xy).
    pub hall_check: Option<HallCheck>,
    /// Extra flags: `fractional_s`, `fractional_t`, `hall_contradiction`.
    pub flags: Vec<String>,
}

/// A Brown–Zak field found in the data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct BrownZakField {
    /// φ/φ₀ = p/q.
    pub phi_over_phi0: Rational,
    /// Field, T.
    #[serde(rename = "b_T")]
    pub b_t: f64,
}

/// Everything `index` reports.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct IndexReport {
    /// Format name.
    pub format: String,
    /// Format version.
    pub version: u32,
    /// Stack assumed.
    pub stack: Stack,
    /// Gate calibration used.
    pub calibration: Calibration,
    /// Moiré parameters (null without a superlattice).
    pub moire: Option<MoireEstimate>,
    /// Brown–Zak fields found.
    pub brown_zak: Vec<BrownZakField>,
    /// States, strongest first.
    pub states: Vec<IndexedState>,
    /// Fraction of R_xy found mixed into R_xx and removed.
    pub misalignment_fraction: f64,
}

/// Options of the indexing job.
#[derive(Debug, Clone, PartialEq)]
pub struct IndexOptions {
    /// Stack.
    pub stack: Stack,
    /// Calibration to use instead of finding one.
    pub calibration: Option<Calibration>,
    /// Gate dielectric for method (c).
    pub dielectric: Option<Dielectric>,
    /// Lattice mismatch for the twist angle of a graphene/hBN moiré.
    pub mismatch: f64,
    /// Detector thresholds.
    pub score: ScoreOptions,
}

impl IndexOptions {
    /// Defaults for a stack.
    pub fn new(stack: Stack) -> IndexOptions {
        IndexOptions {
            stack,
            calibration: None,
            dielectric: None,
            mismatch: crate::moire::HBN_MISMATCH_DEFAULT,
            score: ScoreOptions::default(),
        }
    }
}

/// Classify (t, s) for `stack`.
pub fn classify(stack: Stack, t: Rational, s: Rational) -> (StateClass, Vec<String>) {
    let mut flags = Vec::new();
    if !s.is_zero() {
        if !s.is_integer() {
            flags.push("fractional_s".to_string());
        }
        if !t.is_integer() {
            flags.push("fractional_t".to_string());
        }
        return (StateClass::Wannier, flags);
    }
    if !t.is_integer() {
        return (StateClass::Fractional, flags);
    }
    if stack
        .sequence(t.numer().abs().max(1))
        .contains(&t.numer().abs())
    {
        (StateClass::Integer, flags)
    } else {
        (StateClass::BrokenSymmetry, flags)
    }
}

/// Run the job.
pub fn index_map(map: &Map, opts: &IndexOptions) -> Result<IndexReport> {
    let gap = gap_map(map, &GapMapOptions::default())?;
    let minima = find_minima(map, &gap, 3.0);
    let calibration = match &opts.calibration {
        Some(c) => c.clone(),
        None => calibrate_map(map, &minima, opts.stack, opts.dielectric.as_ref())?,
    };
    let gate = calibration.gate();
    let moire = if opts.stack.is_moire() {
        moire_density(map, &minima, &gate, opts.stack, opts.mismatch)
    } else {
        None
    };
    let n0 = moire.map(|m| m.n0_cm2 * 1e4);
    let cands = opts.stack.candidates()?;
    let ev = score_lines(map, &gap.g, &gate, n0, &cands, &opts.score);
    let kept = suppress_neighbours(map, &gate, n0, &cands, &ev, &opts.score);
    let sxy = sigma_xy_e2h(map);
    // Hall sign: σ_xy grows with electron density in the convention reported.
    let hall_sign = sxy.as_ref().map(|s| {
        let x = map.x().values();
        let mut acc = 0.0;
        for i in 0..s.nrows() {
            for (j, &xv) in x.iter().enumerate() {
                let v = s[[i, j]];
                if v.is_finite() {
                    acc += v * gate.density(xv).signum();
                }
            }
        }
        if acc >= 0.0 {
            1.0
        } else {
            -1.0
        }
    });
    let b = map.y().values();
    let mut states = Vec::new();
    for &i in &kept {
        let e = &ev[i];
        let c = &cands[e.candidate];
        let (kind, mut flags) = classify(opts.stack, c.t, c.s);
        let hall_check = match (&sxy, hall_sign) {
            (Some(s), Some(sign)) => {
                let (lo, hi) = (e.b_onset_t.unwrap_or(0.0), e.b_max_t.unwrap_or(0.0));
                let vals: Vec<f64> = (0..b.len())
                    .filter(|&r| b[r] >= lo && b[r] <= hi)
                    .filter_map(|r| {
                        let n = c.t.to_f64() * E_OVER_H * b[r] + c.s.to_f64() * n0.unwrap_or(0.0);
                        let f = map.x().fractional_index(gate.gate_for_density(n))?;
                        let v = s[[r, f.round() as usize]];
                        v.is_finite().then_some(sign * v)
                    })
                    .collect();
                let m = median(vals);
                let expected = c.t.to_f64();
                let verdict = if !m.is_finite() {
                    "no_plateau"
                } else if (m - expected).abs() <= 0.15 * expected.abs().max(1.0) {
                    "agrees"
                } else {
                    "contradicts"
                };
                if verdict == "contradicts" {
                    flags.push("hall_contradiction".into());
                }
                Some(HallCheck {
                    sigma_xy_e2h: m,
                    expected_e2h: expected,
                    verdict: verdict.into(),
                })
            }
            _ => None,
        };
        states.push(IndexedState {
            kind,
            t: c.t,
            s: c.s,
            nu: c.s.is_zero().then_some(c.t),
            score: e.score,
            t_stat: e.t_stat,
            b_onset_t: e.b_onset_t,
            b_max_t: e.b_max_t,
            hall_check,
            flags,
        });
    }
    states.sort_by(|a, b| b.score.total_cmp(&a.score));
    let brown_zak = match moire {
        Some(m) => super::brown_zak::find_brown_zak(map, &gap.g, m.n0_cm2 * 1e4),
        None => Vec::new(),
    };
    Ok(IndexReport {
        format: "fanmark-index".into(),
        version: 1,
        stack: opts.stack,
        calibration,
        moire,
        brown_zak,
        states,
        misalignment_fraction: gap.misalignment,
    })
}

//! The whole indexing job on one map: calibration (unless given), gap-strength map, minima,
//! line scoring over the stack's families, suppression, Hall cross-check and classification.

use super::calibrate::{calibrate_map, moire_density, Calibration, MoireEstimate};
use super::features::{
    find_minima, find_plateaus, gap_map, median, sigma_xy_e2h, GapMapOptions, PlateauSegment,
};
use super::score::{is_detected, score_lines, suppress_neighbours, LineEvidence, ScoreOptions};
use super::stack::Stack;
use crate::constants::E_OVER_H;
use crate::error::Result;
use crate::gate::Dielectric;
use crate::line::Family;
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
    /// Median σ_xy of the R_xy plateaus the line passes through in its seen field range,
    /// e²/h (sign fixed so σ_xy grows with n); NaN (null) without a plateau.
    #[serde(deserialize_with = "nan_when_null")]
    pub sigma_xy_e2h: f64,
    /// Expected t.
    pub expected_e2h: f64,
    /// Field rows of the seen range where the line lies on a plateau.
    #[serde(default)]
    pub plateau_rows: usize,
    /// `agrees`, `contradicts` or `no_plateau`.
    pub verdict: String,
}

/// Read a number that JSON writes as null when it is NaN (serde writes a non-finite f64 as
/// null), so a report read back holds the NaN it was written from.
fn nan_when_null<'de, D: serde::Deserializer<'de>>(d: D) -> std::result::Result<f64, D::Error> {
    Ok(Option::<f64>::deserialize(d)?.unwrap_or(f64::NAN))
}

/// Confidence factor of a state whose Hall plateau contradicts its t.
pub const HALL_CONTRADICTION_CONFIDENCE: f64 = 0.5;

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
    /// Confidence in (0, 1]: 1 unless the Hall cross-check contradicts the state (then
    /// [`HALL_CONTRADICTION_CONFIDENCE`]). States are ordered by score × confidence.
    #[serde(default = "full_confidence")]
    pub confidence: f64,
}

fn full_confidence() -> f64 {
    1.0
}

/// Largest change of σ_xy between neighbouring gate points on a plateau, e²/h.
const PLATEAU_TOLERANCE_E2H: f64 = 0.03;
/// Fewest gate points of a plateau.
const PLATEAU_MIN_POINTS: usize = 3;

/// Tolerance of the Hall cross-check for slope t, e²/h: a plateau agrees when its σ_xy lies
/// within this of t (the plateaus of fractions and of high ν are less flat).
fn hall_tolerance(t: f64) -> f64 {
    0.1 + 0.02 * t.abs()
}

/// The Hall cross-check of the line n(B) = t(e/h)B + s n₀ over fields [lo, hi] against the
/// R_xy plateaus (σ_xy in e²/h, already signed so it grows with n).
#[allow(clippy::too_many_arguments)]
fn hall_check(
    map: &Map,
    gate: &crate::gate::SingleGate,
    plateaus: &[Vec<PlateauSegment>],
    t: Rational,
    s: Rational,
    n0: f64,
    lo: f64,
    hi: f64,
) -> HallCheck {
    let b = map.y().values();
    let mut vals = Vec::new();
    let mut rows_seen = 0usize;
    for (r, &br) in b.iter().enumerate() {
        if br < lo || br > hi {
            continue;
        }
        rows_seen += 1;
        let n = t.to_f64() * E_OVER_H * br + s.to_f64() * n0;
        let v = gate.gate_for_density(n);
        if let Some(p) = plateaus[r]
            .iter()
            .find(|p| v >= p.gate_range_v.0 && v <= p.gate_range_v.1)
        {
            vals.push(p.sigma_xy_e2h);
        }
    }
    let count = vals.len();
    let m = median(vals);
    let expected = t.to_f64();
    // A plateau on fewer than a fifth of the seen rows (or two rows) is no plateau.
    let verdict = if count < 2 || 5 * count < rows_seen || !m.is_finite() {
        "no_plateau"
    } else if (m - expected).abs() <= hall_tolerance(expected) {
        "agrees"
    } else {
        "contradicts"
    };
    HallCheck {
        sigma_xy_e2h: m,
        expected_e2h: expected,
        plateau_rows: count,
        verdict: verdict.into(),
    }
}

/// True when the Hall check of a fan line of filling `t` contradicts it with the plateau of an
/// integer filling either side of t (⌊t⌋ or ⌈t⌉). A fraction there sits in that integer
/// state's localised range, where its own gap cannot show: the dip along it is the edge of
/// the integer state's plateau, not the fraction.
pub fn on_neighbouring_integer_plateau(t: Rational, h: &HallCheck) -> bool {
    let nearest = h.sigma_xy_e2h.round();
    let t = t.to_f64();
    h.verdict == "contradicts"
        && (nearest == t.floor() || nearest == t.ceil())
        && (h.sigma_xy_e2h - nearest).abs() <= hall_tolerance(nearest)
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

/// True when evidence `a` is better than `b` for the same candidate: detected where `b` is not,
/// or both detected and `a` scores higher.
fn better_evidence(a: &LineEvidence, b: &LineEvidence, opts: &ScoreOptions) -> bool {
    match (is_detected(a, opts), is_detected(b, opts)) {
        (true, false) => true,
        (true, true) => a.score > b.score,
        _ => false,
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
    let mut ev = score_lines(map, &gap.g, &gate, n0, &cands, &opts.score);
    if let Some(rxx) = &gap.rxx_alone {
        // The fan lines (s = 0) looked at again on R_xx alone, keeping the better evidence:
        // beside the ν = 0 insulator σ_xx's wide trough fills the combined strength, and the
        // R_xx dip of a state there (ν = ±1/3, ±2/3, ±1) stands on no ridge of it. (Not the
        // Wannier lines: their many more candidates would meet that many more chance ridges in
        // a second look.)
        let again = score_lines(map, rxx, &gate, n0, &cands, &opts.score);
        for (e, o) in ev.iter_mut().zip(again) {
            if cands[e.candidate].s.is_zero() && better_evidence(&o, e, &opts.score) {
                *e = o;
            }
        }
    }
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
    // Hall plateaus per row, σ_xy signed to grow with n.
    let plateaus: Option<Vec<Vec<PlateauSegment>>> = match (&sxy, hall_sign) {
        (Some(sx), Some(sign)) => {
            let signed = sx.mapv(|v| sign * v);
            let mut rows = vec![Vec::new(); map.y().len()];
            for p in find_plateaus(map, &signed, PLATEAU_TOLERANCE_E2H, PLATEAU_MIN_POINTS) {
                rows[p.row].push(p);
            }
            Some(rows)
        }
        _ => None,
    };
    // A fraction of the fan on the Hall plateau of an integer state beside it is dropped
    // before the neighbours are compared (see [`on_neighbouring_integer_plateau`]).
    if let Some(p) = &plateaus {
        for e in ev.iter_mut() {
            let c = &cands[e.candidate];
            if c.line.family != Family::CompositeFermion || !is_detected(e, &opts.score) {
                continue;
            }
            let (lo, hi) = (e.b_onset_t.unwrap_or(0.0), e.b_max_t.unwrap_or(0.0));
            let h = hall_check(map, &gate, p, c.t, c.s, n0.unwrap_or(0.0), lo, hi);
            if on_neighbouring_integer_plateau(c.t, &h) {
                e.score = 0.0;
            }
        }
    }
    let kept = suppress_neighbours(map, &gate, n0, &cands, &ev, &opts.score);
    let mut states = Vec::new();
    for &i in &kept {
        let e = &ev[i];
        let c = &cands[e.candidate];
        let (kind, mut flags) = classify(opts.stack, c.t, c.s);
        let hall_check = plateaus.as_ref().map(|p| {
            let (lo, hi) = (e.b_onset_t.unwrap_or(0.0), e.b_max_t.unwrap_or(0.0));
            hall_check(map, &gate, p, c.t, c.s, n0.unwrap_or(0.0), lo, hi)
        });
        let mut confidence = 1.0;
        if hall_check
            .as_ref()
            .is_some_and(|h| h.verdict == "contradicts")
        {
            flags.push("hall_contradiction".into());
            confidence = HALL_CONTRADICTION_CONFIDENCE;
        }
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
            confidence,
        });
    }
    states.sort_by(|a, b| (b.score * b.confidence).total_cmp(&(a.score * a.confidence)));
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

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_hall_check_without_plateau_reads_back_from_its_json() {
        // serde_json writes the NaN of "no plateau" as null; reading the report back (as
        // `figure --states` and the viewer do) must give NaN again, not fail.
        let h = HallCheck {
            sigma_xy_e2h: f64::NAN,
            expected_e2h: 14.0,
            plateau_rows: 0,
            verdict: "no_plateau".into(),
        };
        let text = serde_json::to_string(&h).unwrap();
        assert!(text.contains("\"sigma_xy_e2h\":null"), "{text}");
        let back: HallCheck = serde_json::from_str(&text).unwrap();
        assert!(back.sigma_xy_e2h.is_nan());
        assert_eq!(back.verdict, "no_plateau");
        let agrees: HallCheck = serde_json::from_str(
            r#"{"sigma_xy_e2h": 2.01, "expected_e2h": 2.0, "plateau_rows": 9, "verdict": "agrees"}"#,
        )
        .unwrap();
        assert_eq!(agrees.sigma_xy_e2h, 2.01);
    }

    #[test]
    fn a_fraction_on_the_plateau_of_an_integer_beside_it_is_told() {
        let check = |sigma: f64, verdict: &str| HallCheck {
            sigma_xy_e2h: sigma,
            expected_e2h: 7.0 / 3.0,
            plateau_rows: 5,
            verdict: verdict.into(),
        };
        let seven_thirds = Rational::new(7, 3).unwrap();
        assert!(on_neighbouring_integer_plateau(
            seven_thirds,
            &check(2.01, "contradicts")
        ));
        assert!(on_neighbouring_integer_plateau(
            seven_thirds,
            &check(2.98, "contradicts")
        ));
        // Not an integer beside 7/3, not an integer at all, or no contradiction.
        assert!(!on_neighbouring_integer_plateau(
            seven_thirds,
            &check(1.0, "contradicts")
        ));
        assert!(!on_neighbouring_integer_plateau(
            seven_thirds,
            &check(2.6, "contradicts")
        ));
        assert!(!on_neighbouring_integer_plateau(
            seven_thirds,
            &check(f64::NAN, "no_plateau")
        ));
        assert!(!on_neighbouring_integer_plateau(
            seven_thirds,
            &check(2.33, "agrees")
        ));
        // Below zero the integers beside −2/3 are −1 and 0.
        let minus = Rational::new(-2, 3).unwrap();
        assert!(on_neighbouring_integer_plateau(
            minus,
            &check(-1.02, "contradicts")
        ));
        assert!(!on_neighbouring_integer_plateau(
            minus,
            &check(-2.0, "contradicts")
        ));
    }
}

//! Activation gaps from a temperature series: the R_xx minimum of a state at a field, fitted to
//! the Arrhenius law R_xx = R₀ exp(−Δ/(2k_BT)).
//!
//! # Convention
//! The factor 2 is part of the law: Δ is the full gap between the levels either side of the
//! Fermi level (the chemical potential sits mid-gap). The slope of ln R_xx against 1/T is
//! −Δ/(2k_B). A fit of exp(−Δ/(k_BT)) would report half this Δ; outputs say which is used.
//!
//! # Activated range
//! Thermal activation holds between a low-temperature floor (hopping, leakage) and the
//! temperatures at which k_BT approaches Δ. Given explicitly, or chosen automatically: of all
//! runs of consecutive temperatures with at least `min_points` points, the longest on which
//! ln R is linear in 1/T (every residual within `linearity_tolerance`) with a negative slope;
//! ties go to the smaller rms residual.

use crate::constants::{BOLTZMANN_K, E_OVER_H};
use crate::error::{Error, Result};
use crate::fit::{fit_line, LineFit};
use crate::gate::SingleGate;
use crate::map::{ChannelKind, Map, Quantity};
use crate::rational::Rational;
use crate::units::kelvin_to_mev;
use serde::{Deserialize, Serialize};

/// Statement of the Arrhenius convention, written into every result.
pub const ARRHENIUS_CONVENTION: &str =
    "R_xx = R0·exp(−Δ/(2·k_B·T)): Δ is the full gap (factor 2 included); slope of ln R_xx vs 1/T = −Δ/(2k_B)";

/// How the thermally activated temperatures are chosen.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum ActivatedRange {
    /// The longest linear run of consecutive temperatures (module docs).
    Auto,
    /// Temperatures in [t_min, t_max] K.
    Given {
        /// Lowest temperature used, K.
        #[serde(rename = "t_min_K")]
        t_min_k: f64,
        /// Highest temperature used, K.
        #[serde(rename = "t_max_K")]
        t_max_k: f64,
    },
}

/// Options of the activation fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GapOptions {
    /// Which temperatures are fitted.
    pub range: ActivatedRange,
    /// Fewest points in the fitted range (at least 3).
    pub min_points: usize,
    /// Largest |residual| of ln R allowed in an automatic range (0.08 ≈ 8 %).
    pub linearity_tolerance: f64,
    /// Half-width of the search for the minimum around the state's line, in filling-factor
    /// units (of (e/h)B).
    pub search_half_width_nu: f64,
    /// Gate model, needed for maps over gate voltage.
    pub gate: Option<SingleGate>,
    /// n₀ = 1/A in m⁻² for states with s ≠ 0.
    pub n0_m2: Option<f64>,
}

impl Default for GapOptions {
    fn default() -> GapOptions {
        GapOptions {
            range: ActivatedRange::Auto,
            min_points: 4,
            linearity_tolerance: 0.08,
            search_half_width_nu: 0.3,
            gate: None,
            n0_m2: None,
        }
    }
}

impl GapOptions {
    /// Defaults with a gate model for maps over gate voltage.
    pub fn with_gate(gate: SingleGate) -> GapOptions {
        GapOptions {
            gate: Some(gate),
            ..GapOptions::default()
        }
    }
}

/// A state: the line n(B) = t(e/h)B + s n₀.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct StateLine {
    /// Slope t in e/h.
    pub t: Rational,
    /// Intercept s in n₀.
    pub s: Rational,
}

impl StateLine {
    /// The constant-filling state ν (t = ν, s = 0).
    pub fn filling(nu: Rational) -> StateLine {
        StateLine {
            t: nu,
            s: Rational::ZERO,
        }
    }
    /// Density of the line at field `b_t` (T), m⁻²; errors if s ≠ 0 without n₀.
    pub fn density(&self, b_t: f64, n0_m2: Option<f64>) -> Result<f64> {
        let s = self.s.to_f64();
        let base = if s == 0.0 {
            0.0
        } else {
            s * n0_m2.ok_or_else(|| {
                Error::invalid(
                    "state",
                    format!(
                        "(t, s) = ({}, {}) has s ≠ 0 and needs n₀ (the density of one carrier per moiré cell)",
                        self.t, self.s
                    ),
                )
            })?
        };
        Ok(self.t.to_f64() * E_OVER_H * b_t + base)
    }
}

/// One point of the Arrhenius plot.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ArrheniusPoint {
    /// Temperature, K.
    #[serde(rename = "t_K")]
    pub temperature_k: f64,
    /// R_xx, Ω.
    pub rxx_ohm: f64,
    /// 1/T, K⁻¹.
    #[serde(rename = "inv_t_per_K")]
    pub inv_t: f64,
    /// ln(R_xx / 1 Ω).
    pub ln_rxx: f64,
    /// True if in the fitted (activated) range.
    pub used: bool,
}

/// The Arrhenius fit and the gap.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ArrheniusFit {
    /// Every point, sorted by temperature, with the fitted ones marked.
    pub points: Vec<ArrheniusPoint>,
    /// Fit of ln R against 1/T: slope in K, intercept ln(R₀/Ω).
    pub fit: LineFit,
    /// Gap Δ/k_B, K.
    #[serde(rename = "gap_K")]
    pub gap_k: f64,
    /// Standard error of Δ/k_B, K.
    #[serde(rename = "gap_err_K")]
    pub gap_err_k: f64,
    /// Gap Δ, meV.
    pub gap_mev: f64,
    /// Standard error of Δ, meV.
    pub gap_err_mev: f64,
    /// Prefactor R₀, Ω.
    pub r0_ohm: f64,
    /// Fitted temperature range (min, max), K.
    #[serde(rename = "fit_range_K")]
    pub fit_range_k: (f64, f64),
    /// The convention, in words.
    pub convention: String,
}

/// An activation gap of a state at a field from maps at several temperatures.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Activation {
    /// The state.
    pub state: StateLine,
    /// Field, T.
    #[serde(rename = "b_T")]
    pub b_t: f64,
    /// Density of the state's line at that field, m⁻².
    pub line_density_m2: f64,
    /// Density at which each map's minimum was found, m⁻² (same order as the points' input).
    pub minimum_density_m2: Vec<f64>,
    /// The Arrhenius fit.
    pub arrhenius: ArrheniusFit,
}

/// The gap of a state at each field of a range.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GapVersusField {
    /// The state.
    pub state: StateLine,
    /// (field in T, gap in K, its error in K) where a fit succeeded.
    pub gaps: Vec<(f64, f64, f64)>,
    /// (field in T, why no fit) where it did not.
    pub refused: Vec<(f64, String)>,
    /// The full results, in field order.
    pub fits: Vec<Activation>,
}

/// Fit R = R₀ exp(−Δ/(2k_BT)) to `(temperature K, R_xx Ω)` points (see the module docs for the
/// range choice). Errors if fewer than two distinct temperatures, a non-positive R, or no range
/// with `min_points` activated points.
pub fn fit_arrhenius(temps_k: &[f64], rxx_ohm: &[f64], opts: &GapOptions) -> Result<ArrheniusFit> {
    if temps_k.len() != rxx_ohm.len() {
        return Err(Error::invalid(
            "Arrhenius fit",
            format!(
                "{} temperatures but {} resistances",
                temps_k.len(),
                rxx_ohm.len()
            ),
        ));
    }
    let mut pts: Vec<(f64, f64)> = temps_k
        .iter()
        .cloned()
        .zip(rxx_ohm.iter().cloned())
        .collect();
    for &(t, r) in &pts {
        if !(t > 0.0 && t.is_finite()) {
            return Err(Error::invalid(
                "Arrhenius fit",
                format!("temperature {t} K is not positive"),
            ));
        }
        if !(r > 0.0 && r.is_finite()) {
            return Err(Error::invalid(
                "Arrhenius fit",
                format!("R_xx = {r} Ω at {t} K: ln R needs a positive resistance"),
            ));
        }
    }
    pts.sort_by(|a, b| a.0.total_cmp(&b.0));
    let distinct = {
        let mut d: Vec<f64> = pts.iter().map(|p| p.0).collect();
        d.dedup();
        d.len()
    };
    if distinct < 2 {
        return Err(Error::invalid(
            "Arrhenius fit",
            format!(
                "needs maps at several temperatures; got {} point(s) at {} distinct temperature(s)",
                pts.len(),
                distinct
            ),
        ));
    }
    let min_points = opts.min_points.max(3);
    let x: Vec<f64> = pts.iter().map(|p| 1.0 / p.0).collect();
    let y: Vec<f64> = pts.iter().map(|p| p.1.ln()).collect();
    let (lo, hi, fit) = match opts.range {
        ActivatedRange::Given { t_min_k, t_max_k } => {
            let idx: Vec<usize> = (0..pts.len())
                .filter(|&i| pts[i].0 >= t_min_k && pts[i].0 <= t_max_k)
                .collect();
            if idx.len() < min_points.min(pts.len()).max(2) || idx.len() < 2 {
                return Err(Error::invalid(
                    "Arrhenius fit",
                    format!(
                        "the range {t_min_k}–{t_max_k} K holds {} point(s); need at least {min_points}",
                        idx.len()
                    ),
                ));
            }
            let (a, b) = (idx[0], idx[idx.len() - 1]);
            let f = fit_line(&x[a..=b], &y[a..=b])?;
            (a, b, f)
        }
        ActivatedRange::Auto => {
            let mut best: Option<(usize, usize, LineFit)> = None;
            for a in 0..pts.len() {
                for b in (a + min_points - 1)..pts.len() {
                    let Ok(f) = fit_line(&x[a..=b], &y[a..=b]) else {
                        continue;
                    };
                    if !(f.slope < 0.0) || f.max_residual > opts.linearity_tolerance {
                        continue;
                    }
                    let better = match &best {
                        None => true,
                        Some((ba, bb, bf)) => {
                            let (len, blen) = (b - a, bb - ba);
                            len > blen || (len == blen && f.rms_residual < bf.rms_residual)
                        }
                    };
                    if better {
                        best = Some((a, b, f));
                    }
                }
            }
            best.ok_or_else(|| {
                Error::invalid(
                    "Arrhenius fit",
                    format!(
                        "no run of {min_points} consecutive temperatures (of {} between {} and {} K) \
                         is thermally activated: ln R_xx is not linear in 1/T with a negative slope \
                         within {} — refusing to fit; give more temperatures or a range",
                        pts.len(),
                        pts[0].0,
                        pts[pts.len() - 1].0,
                        opts.linearity_tolerance
                    ),
                )
            })?
        }
    };
    if !(fit.slope < 0.0) {
        return Err(Error::invalid(
            "Arrhenius fit",
            format!(
                "R_xx falls with temperature in the range (slope of ln R vs 1/T is {:+.4} K); \
                 not thermally activated",
                fit.slope
            ),
        ));
    }
    let gap_k = -2.0 * fit.slope;
    let gap_err_k = 2.0 * fit.slope_err;
    Ok(ArrheniusFit {
        points: pts
            .iter()
            .enumerate()
            .map(|(i, &(t, r))| ArrheniusPoint {
                temperature_k: t,
                rxx_ohm: r,
                inv_t: 1.0 / t,
                ln_rxx: r.ln(),
                used: i >= lo && i <= hi,
            })
            .collect(),
        gap_k,
        gap_err_k,
        gap_mev: kelvin_to_mev(gap_k),
        gap_err_mev: kelvin_to_mev(gap_err_k),
        r0_ohm: fit.intercept.exp(),
        fit_range_k: (pts[lo].0, pts[hi].0),
        fit,
        convention: ARRHENIUS_CONVENTION.into(),
    })
}

/// Name of a map for messages: its source file, or its position.
fn map_name(map: &Map, i: usize) -> String {
    map.meta
        .source
        .as_ref()
        .map(|p| p.display().to_string())
        .unwrap_or_else(|| format!("map {}", i + 1))
}

/// The minimum of R_xx along the state's line at field `b_t` in one map: the field row nearest
/// `b_t`, searched over densities within ± `search_half_width_nu`·(e/h)B of the line.
/// Returns (R_xx in Ω, density of the minimum in m⁻², field used in T).
pub fn minimum_on_line(
    map: &Map,
    state: &StateLine,
    b_t: f64,
    opts: &GapOptions,
) -> Result<(f64, f64, f64)> {
    let (bw, baxis) = map.axis_of(Quantity::Field).ok_or_else(|| {
        Error::MapRequirement("an activation gap needs a map with a field axis".into())
    })?;
    let (gw, gaxis) = match map.axis_of(Quantity::Density) {
        Some(a) => a,
        None => map.axis_of(Quantity::Gate).ok_or_else(|| {
            Error::MapRequirement(
                "an activation gap needs a gate-voltage or density axis besides the field".into(),
            )
        })?,
    };
    let to_n = |v: f64| -> Result<f64> {
        match gaxis.quantity {
            Quantity::Density => Ok(v),
            _ => opts.gate.map(|g| g.density(v)).ok_or_else(|| {
                Error::invalid(
                    "gate model",
                    "a map over gate voltage needs a gate model (α and V_CNP) to find the state's line",
                )
            }),
        }
    };
    if !(b_t >= baxis.min() - 1e-9 && b_t <= baxis.max() + 1e-9) {
        return Err(Error::invalid(
            "field",
            format!(
                "{b_t} T is outside the map's field range {}…{} T",
                baxis.min(),
                baxis.max()
            ),
        ));
    }
    let row = baxis.nearest_index(b_t).unwrap_or(0);
    let b_used = baxis.values()[row];
    let n_line = state.density(b_used, opts.n0_m2)?;
    let half = opts.search_half_width_nu * E_OVER_H * b_used.abs();
    let data = &map.require(ChannelKind::Rxx)?.data;
    let mut best: Option<(f64, f64)> = None;
    for (i, &v) in gaxis.values().iter().enumerate() {
        let n = to_n(v)?;
        if (n - n_line).abs() > half {
            continue;
        }
        let r = if bw == 'y' && gw == 'x' {
            data[[row, i]]
        } else {
            data[[i, row]]
        };
        if r.is_finite() && best.is_none_or(|b| r < b.0) {
            best = Some((r, n));
        }
    }
    let (r, n) = best.ok_or_else(|| {
        Error::invalid(
            "state",
            format!(
                "(t, s) = ({}, {}) at {b_used} T: no finite R_xx within ±{} of its line at n = {:.4}×10¹² cm⁻² (outside the map's range?)",
                state.t,
                state.s,
                opts.search_half_width_nu,
                n_line / 1e16
            ),
        )
    })?;
    Ok((r, n, b_used))
}

/// The activation gap of `state` at field `b_t` (T) from `maps` measured at several
/// temperatures (each map's `meta.temperature_k`). Errors name the map lacking a temperature,
/// and refuse a single temperature or too few activated points.
pub fn activation(
    maps: &[Map],
    state: StateLine,
    b_t: f64,
    opts: &GapOptions,
) -> Result<Activation> {
    if maps.len() < 2 {
        return Err(Error::invalid(
            "activation gap",
            format!(
                "needs maps at several temperatures, got {} map(s)",
                maps.len()
            ),
        ));
    }
    let mut temps = Vec::new();
    let mut rs = Vec::new();
    let mut ns = Vec::new();
    let mut b_used = b_t;
    for (i, m) in maps.iter().enumerate() {
        let t = m.meta.temperature_k.ok_or_else(|| {
            Error::MapRequirement(format!(
                "{}: no temperature recorded (add a T_K column or give the temperature as an option)",
                map_name(m, i)
            ))
        })?;
        let (r, n, b) = minimum_on_line(m, &state, b_t, opts)
            .map_err(|e| Error::invalid(map_name(m, i), e.to_string()))?;
        temps.push(t);
        rs.push(r);
        ns.push(n);
        b_used = b;
    }
    let arrhenius = fit_arrhenius(&temps, &rs, opts)?;
    Ok(Activation {
        state,
        b_t: b_used,
        line_density_m2: state.density(b_used, opts.n0_m2)?,
        minimum_density_m2: ns,
        arrhenius,
    })
}

/// The gap of `state` at every field row of the first map inside `field_range_t` (T).
pub fn gap_versus_field(
    maps: &[Map],
    state: StateLine,
    field_range_t: (f64, f64),
    opts: &GapOptions,
) -> Result<GapVersusField> {
    let first = maps.first().ok_or_else(|| {
        Error::invalid(
            "activation gap",
            "needs maps at several temperatures, got none",
        )
    })?;
    let (_, baxis) = first
        .axis_of(Quantity::Field)
        .ok_or_else(|| Error::MapRequirement("a gap versus field needs a field axis".into()))?;
    let fields: Vec<f64> = baxis
        .values()
        .iter()
        .cloned()
        .filter(|&b| b >= field_range_t.0 && b <= field_range_t.1 && b != 0.0)
        .collect();
    if fields.is_empty() {
        return Err(Error::invalid(
            "field range",
            format!(
                "{}–{} T holds no field of the map ({}…{} T)",
                field_range_t.0,
                field_range_t.1,
                baxis.min(),
                baxis.max()
            ),
        ));
    }
    let mut out = GapVersusField {
        state,
        gaps: Vec::new(),
        refused: Vec::new(),
        fits: Vec::new(),
    };
    for b in fields {
        match activation(maps, state, b, opts) {
            Ok(a) => {
                out.gaps
                    .push((a.b_t, a.arrhenius.gap_k, a.arrhenius.gap_err_k));
                out.fits.push(a);
            }
            Err(e) => out.refused.push((b, e.to_string())),
        }
    }
    Ok(out)
}

/// Thermal energy k_B T in J at `t_k` (K); for converting a gap to other units.
pub fn thermal_energy_j(t_k: f64) -> f64 {
    BOLTZMANN_K * t_k
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn floor_and_high_temperature_points_are_left_out_automatically() {
        // Activated Δ = 20 K between 2 and 8 K, a floor below, a roll-over above.
        let t = [0.5, 0.8, 1.0, 2.0, 3.0, 4.0, 5.0, 6.0, 8.0, 20.0, 30.0];
        let r: Vec<f64> = t
            .iter()
            .map(|&t: &f64| {
                let act = 1000.0 * (-20.0 / (2.0 * t)).exp();
                if t < 1.5 {
                    30.0
                } else if t > 10.0 {
                    act * 0.5
                } else {
                    act
                }
            })
            .collect();
        let f = fit_arrhenius(&t, &r, &GapOptions::default()).unwrap();
        assert!((f.gap_k - 20.0).abs() < 1e-9, "{}", f.gap_k);
        assert_eq!(f.fit_range_k, (2.0, 8.0));
        // Given range.
        let g = GapOptions {
            range: ActivatedRange::Given {
                t_min_k: 3.0,
                t_max_k: 6.0,
            },
            ..GapOptions::default()
        };
        assert!((fit_arrhenius(&t, &r, &g).unwrap().gap_k - 20.0).abs() < 1e-9);
    }

    #[test]
    fn refusals_are_clear() {
        let e = fit_arrhenius(&[2.0, 2.0], &[1.0, 1.0], &GapOptions::default()).unwrap_err();
        assert!(e.to_string().contains("several temperatures"), "{e}");
        let e = fit_arrhenius(&[2.0, 3.0], &[1.0, -1.0], &GapOptions::default()).unwrap_err();
        assert!(e.to_string().contains("positive resistance"), "{e}");
        // Falling with temperature: not activated.
        let e = fit_arrhenius(
            &[1.0, 2.0, 3.0, 4.0],
            &[10.0, 8.0, 6.0, 4.0],
            &GapOptions::default(),
        )
        .unwrap_err();
        assert!(e.to_string().contains("refusing to fit"), "{e}");
    }
}

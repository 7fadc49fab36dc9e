//! Brown–Zak fields: horizontal features of the map at φ/φ₀ = 1/q, B_q = φ₀n₀/q. At these
//! fields the superlattice's magnetic unit cell is commensurate and the longitudinal
//! conductivity rises along the whole gate sweep, so they are field rows whose typical
//! ln σ_xx (or ln R_xx without R_xy) departs from its smooth trend in field. The gap-strength
//! map cannot show them: it is normalised row by row.

use super::features::{median, robust_sigma};
use super::run::BrownZakField;
use crate::conductivity::sigma_from_rho;
use crate::constants::FLUX_QUANTUM_H_OVER_E;
use crate::map::{ChannelKind, Map};
use crate::rational::Rational;
use ndarray::Array2;

/// Largest q searched.
const Q_MAX: i64 = 8;
/// Significance of a Brown–Zak row: robust standard deviations of the row-to-row residual.
const THRESHOLD_SIGMA: f64 = 4.0;

/// Quantile of ln σ_xx along a row taken as its level: high, so that it follows the Landau
/// levels' conduction between gaps (inside a gap σ_xx sits at its floor and does not move).
const ROW_QUANTILE: f64 = 0.8;

/// Per row: the upper quantile over the gate axis of ln σ_xx (ln R_xx without R_xy).
fn row_profile(map: &Map) -> Option<Vec<f64>> {
    let rxx = &map.channel_of(ChannelKind::Rxx)?.data;
    let rxy = map.channel_of(ChannelKind::Rxy).map(|c| &c.data);
    let (rows, cols) = rxx.dim();
    Some(
        (0..rows)
            .map(|i| {
                let mut v: Vec<f64> = (0..cols)
                    .filter_map(|j| {
                        let r = rxx[[i, j]];
                        let v = match rxy {
                            Some(h) => sigma_from_rho(r, h[[i, j]]).0,
                            None => r,
                        };
                        (v.is_finite() && v > 0.0).then(|| v.ln())
                    })
                    .collect();
                if v.is_empty() {
                    return f64::NAN;
                }
                v.sort_by(f64::total_cmp);
                v[((v.len() - 1) as f64 * ROW_QUANTILE).round() as usize]
            })
            .collect(),
    )
}

/// The fields φ/φ₀ = 1/q (q = 1…8) inside the map at which the row profile of ln σ_xx has a
/// significant bump (> 4 robust σ above a running median over rows, within one row of B_q).
/// `_g` (the gap-strength map) is not used: it is normalised per row.
pub fn find_brown_zak(map: &Map, _g: &Array2<f64>, n0_m2: f64) -> Vec<BrownZakField> {
    let b = map.y().values();
    let rows = b.len();
    if rows < 9 || !(n0_m2 > 0.0) {
        return Vec::new();
    }
    let Some(prof) = row_profile(map) else {
        return Vec::new();
    };
    let w = (rows / 12).max(3);
    let resid: Vec<f64> = (0..rows)
        .map(|i| {
            let lo = i.saturating_sub(w);
            let hi = (i + w + 1).min(rows);
            prof[i] - median(prof[lo..hi].iter().copied())
        })
        .collect();
    let sig = robust_sigma(resid.iter().copied()).max(1e-9);
    let b1 = FLUX_QUANTUM_H_OVER_E * n0_m2;
    let mut out = Vec::new();
    for q in 1..=Q_MAX {
        let bq = b1 / q as f64;
        let Some(f) = map.y().fractional_index(bq) else {
            continue;
        };
        let i = f.round() as usize;
        let lo = i.saturating_sub(1);
        let hi = (i + 2).min(rows);
        let peak = resid[lo..hi]
            .iter()
            .copied()
            .filter(|v| v.is_finite())
            .fold(f64::NEG_INFINITY, f64::max);
        if peak > THRESHOLD_SIGMA * sig {
            if let Ok(r) = Rational::new(1, q) {
                out.push(BrownZakField {
                    phi_over_phi0: r,
                    b_t: bq,
                });
            }
        }
    }
    out
}

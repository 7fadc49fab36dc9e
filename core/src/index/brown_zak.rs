//! Brown–Zak fields: horizontal features of the map at φ/φ₀ = 1/q, B_q = φ₀n₀/q, found as
//! field rows whose median gap strength departs from its smooth trend in field.

use super::features::{median, robust_sigma};
use super::run::BrownZakField;
use crate::constants::FLUX_QUANTUM_H_OVER_E;
use crate::map::Map;
use crate::rational::Rational;
use ndarray::Array2;

/// The fields φ/φ₀ = 1/q (q = 1…8) inside the map at which the row profile of the median
/// |g| has a significant bump (> 4 robust σ from a running median over rows).
pub fn find_brown_zak(map: &Map, g: &Array2<f64>, n0_m2: f64) -> Vec<BrownZakField> {
    let b = map.y().values();
    let rows = b.len();
    if rows < 9 || !(n0_m2 > 0.0) {
        return Vec::new();
    }
    let prof: Vec<f64> = (0..rows)
        .map(|i| median(g.row(i).iter().copied()))
        .collect();
    let w = (rows / 10).max(3);
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
    for q in 1..=8i64 {
        let bq = b1 / q as f64;
        let Some(f) = map.y().fractional_index(bq) else {
            continue;
        };
        let i = f.round() as usize;
        let lo = i.saturating_sub(1);
        let hi = (i + 2).min(rows);
        let peak = resid[lo..hi].iter().map(|v| v.abs()).fold(0.0, f64::max);
        if peak > 4.0 * sig {
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

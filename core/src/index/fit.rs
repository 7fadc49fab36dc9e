//! Free fits: a straight line n = a·B + b through feature points in the (n, B) plane by weighted
//! least squares with its covariance, and its indexing as ranked rational (t, s) candidates
//! within the uncertainty, t = a/(e/h) and s = b/n₀, under denominator bounds.

use crate::constants::E_OVER_H;
use crate::error::{Error, Result};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// One point of a free fit: density n (m⁻²), field B (T), and the standard uncertainty of n.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FitPoint {
    /// Density, m⁻².
    pub n_m2: f64,
    /// Field, T.
    pub b_t: f64,
    /// Standard uncertainty of n, m⁻² (> 0).
    pub sigma_n_m2: f64,
}

/// Weighted least-squares line n = slope·B + intercept.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LineFit {
    /// Slope dn/dB, m⁻² T⁻¹.
    pub slope: f64,
    /// Intercept at B = 0, m⁻².
    pub intercept: f64,
    /// Covariance [[var slope, cov], [cov, var intercept]] (scaled by the reduced χ² when
    /// that exceeds 1).
    pub cov: [[f64; 2]; 2],
    /// Reduced χ² of the fit.
    pub chi2_reduced: f64,
    /// Points used.
    pub points: usize,
}

/// Fit n = a·B + b to `points` by weighted least squares (weights 1/σ²). Needs at least three
/// points at two or more distinct fields.
pub fn fit_line(points: &[FitPoint]) -> Result<LineFit> {
    let good: Vec<&FitPoint> = points
        .iter()
        .filter(|p| p.n_m2.is_finite() && p.b_t.is_finite() && p.sigma_n_m2 > 0.0)
        .collect();
    if good.len() < 3 {
        return Err(Error::invalid(
            "free-fit points",
            format!(
                "{} usable points: need at least 3 with finite n, B and σ > 0",
                good.len()
            ),
        ));
    }
    let (mut s, mut sx, mut sy, mut sxx, mut sxy) = (0.0, 0.0, 0.0, 0.0, 0.0);
    for p in &good {
        let w = 1.0 / (p.sigma_n_m2 * p.sigma_n_m2);
        s += w;
        sx += w * p.b_t;
        sy += w * p.n_m2;
        sxx += w * p.b_t * p.b_t;
        sxy += w * p.b_t * p.n_m2;
    }
    let det = s * sxx - sx * sx;
    if !(det > 1e-12 * s * sxx) {
        return Err(Error::invalid(
            "free-fit points",
            "all points are at the same field: the slope is undetermined",
        ));
    }
    let slope = (s * sxy - sx * sy) / det;
    let intercept = (sxx * sy - sx * sxy) / det;
    let chi2: f64 = good
        .iter()
        .map(|p| ((p.n_m2 - slope * p.b_t - intercept) / p.sigma_n_m2).powi(2))
        .sum();
    let dof = (good.len() - 2) as f64;
    let red = chi2 / dof;
    let k = red.max(1.0);
    Ok(LineFit {
        slope,
        intercept,
        cov: [[k * s / det, -k * sx / det], [-k * sx / det, k * sxx / det]],
        chi2_reduced: red,
        points: good.len(),
    })
}

/// Bounds of the rational search.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct IndexBounds {
    /// Largest denominator of t.
    pub t_den_max: i64,
    /// Largest denominator of s.
    pub s_den_max: i64,
    /// Candidates within this many standard deviations are returned.
    pub n_sigma: f64,
    /// Most candidates returned.
    pub max_candidates: usize,
}

impl Default for IndexBounds {
    fn default() -> Self {
        IndexBounds {
            t_den_max: 9,
            s_den_max: 6,
            n_sigma: 3.0,
            max_candidates: 8,
        }
    }
}

/// One rational reading of a free fit.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct TsCandidate {
    /// Slope t (Hall conductance in e²/h).
    pub t: Rational,
    /// Intercept s in carriers per moiré cell (0 without a moiré cell).
    pub s: Rational,
    /// Distance of (t, s) from the fit in standard deviations (Mahalanobis distance with the
    /// fit's covariance).
    pub residual_sigma: f64,
}

/// Fractions p/q in [lo, hi] with q ≤ `den_max`, each once in lowest terms (the Farey
/// fractions of order `den_max` in the interval, i.e. the Stern–Brocot nodes down to that
/// depth), smallest denominators first.
fn fractions_between(lo: f64, hi: f64, den_max: i64) -> Vec<Rational> {
    let mut out = Vec::new();
    if !(lo.is_finite() && hi.is_finite()) || hi < lo || den_max < 1 {
        return out;
    }
    for q in 1..=den_max {
        let (a, b) = (
            (lo * q as f64).ceil() as i64,
            (hi * q as f64).floor() as i64,
        );
        if b - a > 10_000 {
            break;
        }
        for p in a..=b {
            if let Ok(r) = Rational::new(p, q) {
                if r.denom() == q {
                    out.push(r);
                }
            }
        }
    }
    out
}

/// The ranked (t, s) readings of `fit` within `bounds.n_sigma`. With `n0_m2` the intercept is
/// read as s = b/n₀; without, s = 0 and only t is searched (its residual includes how far the
/// intercept is from 0). Sorted by residual, then by simpler fractions.
pub fn index_fit(fit: &LineFit, n0_m2: Option<f64>, bounds: &IndexBounds) -> Vec<TsCandidate> {
    let t_hat = fit.slope / E_OVER_H;
    let st = fit.cov[0][0].sqrt() / E_OVER_H;
    let (s_hat, ss, cts) = match n0_m2 {
        Some(n0) if n0 > 0.0 => (
            fit.intercept / n0,
            fit.cov[1][1].sqrt() / n0,
            fit.cov[0][1] / (E_OVER_H * n0),
        ),
        _ => (
            fit.intercept,
            fit.cov[1][1].sqrt(),
            fit.cov[0][1] / E_OVER_H,
        ),
    };
    let moire = matches!(n0_m2, Some(n0) if n0 > 0.0);
    // Mahalanobis distance with covariance [[st², cts], [cts, ss²]].
    let det = st * st * ss * ss - cts * cts;
    let dist = |t: f64, s: f64| -> f64 {
        let (dt, ds) = (t - t_hat, s - s_hat);
        if det > 0.0 {
            ((ss * ss * dt * dt - 2.0 * cts * dt * ds + st * st * ds * ds) / det)
                .max(0.0)
                .sqrt()
        } else {
            (dt / st.max(1e-300)).hypot(ds / ss.max(1e-300))
        }
    };
    let k = bounds.n_sigma;
    let ts = fractions_between(t_hat - k * st, t_hat + k * st, bounds.t_den_max);
    let ss_list = if moire {
        fractions_between(s_hat - k * ss, s_hat + k * ss, bounds.s_den_max)
    } else {
        vec![Rational::ZERO]
    };
    let mut out = Vec::new();
    for &t in &ts {
        for &s in &ss_list {
            let d = if moire {
                dist(t.to_f64(), s.to_f64())
            } else {
                dist(t.to_f64(), 0.0)
            };
            if d <= k {
                out.push(TsCandidate {
                    t,
                    s,
                    residual_sigma: d,
                });
            }
        }
    }
    let cx = |c: &TsCandidate| c.t.denom() + c.s.denom();
    out.sort_by(|a, b| {
        a.residual_sigma
            .total_cmp(&b.residual_sigma)
            .then(cx(a).cmp(&cx(b)))
    });
    out.truncate(bounds.max_candidates);
    out
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_points_give_exact_slope_and_intercept() {
        let pts: Vec<FitPoint> = (1..=5)
            .map(|i| FitPoint {
                n_m2: 3.0e15 * i as f64 + 1.0e15,
                b_t: i as f64,
                sigma_n_m2: 1e13,
            })
            .collect();
        let f = fit_line(&pts).unwrap();
        assert!((f.slope / 3.0e15 - 1.0).abs() < 1e-12);
        assert!((f.intercept / 1.0e15 - 1.0).abs() < 1e-9);
        assert!(f.chi2_reduced < 1e-12);
    }

    #[test]
    fn too_few_or_degenerate_points_are_errors() {
        let p = FitPoint {
            n_m2: 1.0,
            b_t: 2.0,
            sigma_n_m2: 1.0,
        };
        assert!(fit_line(&[p, p]).is_err());
        assert!(fit_line(&[p, p, p]).is_err());
    }

    #[test]
    fn farey_fractions_are_reduced_and_bounded() {
        let f = fractions_between(0.0, 1.0, 5);
        // The Farey sequence of order 5 has 11 terms in [0, 1] (classical count 1 + Σφ(q)).
        assert_eq!(f.len(), 11);
        assert!(f.iter().all(|r| r.denom() <= 5));
    }
}

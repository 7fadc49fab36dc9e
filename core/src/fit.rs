//! Least-squares fits shared by the quantitative analyses: a straight line with standard
//! errors, and a polynomial background.
//!
//! The straight-line fit is ordinary least squares; the standard errors come from the residual
//! variance s² = Σr²/(m − 2) (common practice when the point errors are not known).

use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};

/// A straight line y = slope·x + intercept fitted by least squares, with standard errors.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct LineFit {
    /// Slope, in units of y per unit of x.
    pub slope: f64,
    /// Intercept at x = 0, in units of y.
    pub intercept: f64,
    /// Standard error of the slope (0 for exactly two points or a perfect fit).
    pub slope_err: f64,
    /// Standard error of the intercept.
    pub intercept_err: f64,
    /// Root-mean-square residual, in units of y.
    pub rms_residual: f64,
    /// Largest absolute residual, in units of y.
    pub max_residual: f64,
    /// Number of points fitted.
    pub points: usize,
}

impl LineFit {
    /// y on the fitted line at `x`.
    pub fn eval(&self, x: f64) -> f64 {
        self.slope * x + self.intercept
    }
}

/// Fit y = a·x + b to the points by ordinary least squares. Errors if fewer than two points, a
/// non-finite value, or all x equal.
pub fn fit_line(x: &[f64], y: &[f64]) -> Result<LineFit> {
    if x.len() != y.len() {
        return Err(Error::invalid(
            "line fit",
            format!("{} x values but {} y values", x.len(), y.len()),
        ));
    }
    let m = x.len();
    if m < 2 {
        return Err(Error::invalid(
            "line fit",
            format!("needs at least two points, got {m}"),
        ));
    }
    if x.iter().chain(y).any(|v| !v.is_finite()) {
        return Err(Error::invalid("line fit", "a point is not finite"));
    }
    let mf = m as f64;
    let xm = x.iter().sum::<f64>() / mf;
    let ym = y.iter().sum::<f64>() / mf;
    let sxx: f64 = x.iter().map(|&a| (a - xm) * (a - xm)).sum();
    if !(sxx > 0.0) {
        return Err(Error::invalid(
            "line fit",
            "all points have the same x; a slope is undefined",
        ));
    }
    let sxy: f64 = x.iter().zip(y).map(|(&a, &b)| (a - xm) * (b - ym)).sum();
    let slope = sxy / sxx;
    let intercept = ym - slope * xm;
    let res: Vec<f64> = x
        .iter()
        .zip(y)
        .map(|(&a, &b)| b - (slope * a + intercept))
        .collect();
    let ss: f64 = res.iter().map(|r| r * r).sum();
    let (slope_err, intercept_err) = if m > 2 {
        let s2 = ss / (mf - 2.0);
        let se = (s2 / sxx).sqrt();
        (se, (s2 * (1.0 / mf + xm * xm / sxx)).sqrt())
    } else {
        (0.0, 0.0)
    };
    Ok(LineFit {
        slope,
        intercept,
        slope_err,
        intercept_err,
        rms_residual: (ss / mf).sqrt(),
        max_residual: res.iter().fold(0.0, |a, r| a.max(r.abs())),
        points: m,
    })
}

/// Coefficients c₀…c_d of the least-squares polynomial Σ c_k u^k of degree `degree` in the
/// scaled variable u = (x − centre)/half_range, returned with (centre, half_range) so that
/// [`eval_poly`] can evaluate it. Solved by Householder QR (well conditioned for small degrees).
pub fn fit_poly(x: &[f64], y: &[f64], degree: usize) -> Result<(Vec<f64>, f64, f64)> {
    let m = x.len();
    let k = degree + 1;
    if y.len() != m || m < k {
        return Err(Error::invalid(
            "polynomial fit",
            format!("degree {degree} needs at least {k} points with one y each, got {m}"),
        ));
    }
    let lo = x.iter().cloned().fold(f64::INFINITY, f64::min);
    let hi = x.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    let centre = 0.5 * (lo + hi);
    let half = 0.5 * (hi - lo);
    if !(half > 0.0) || !half.is_finite() {
        return Err(Error::invalid(
            "polynomial fit",
            "the x values span no range",
        ));
    }
    // Column-major design matrix.
    let mut a: Vec<Vec<f64>> = (0..k)
        .map(|j| {
            x.iter()
                .map(|&v| ((v - centre) / half).powi(j as i32))
                .collect()
        })
        .collect();
    let mut b = y.to_vec();
    for j in 0..k {
        let norm = a[j][j..].iter().map(|v| v * v).sum::<f64>().sqrt();
        if norm == 0.0 {
            return Err(Error::invalid("polynomial fit", "the design is singular"));
        }
        let alpha = if a[j][j] > 0.0 { -norm } else { norm };
        let mut v: Vec<f64> = a[j][j..].to_vec();
        v[0] -= alpha;
        let vn: f64 = v.iter().map(|t| t * t).sum();
        if vn > 0.0 {
            for col in a.iter_mut().skip(j) {
                let dot: f64 = v.iter().zip(&col[j..]).map(|(p, q)| p * q).sum();
                let f = 2.0 * dot / vn;
                for (c, vi) in col[j..].iter_mut().zip(&v) {
                    *c -= f * vi;
                }
            }
            let dot: f64 = v.iter().zip(&b[j..]).map(|(p, q)| p * q).sum();
            let f = 2.0 * dot / vn;
            for (c, vi) in b[j..].iter_mut().zip(&v) {
                *c -= f * vi;
            }
        }
    }
    let mut c = vec![0.0; k];
    for j in (0..k).rev() {
        let mut s = b[j];
        for (i, ci) in c.iter().enumerate().skip(j + 1) {
            s -= a[i][j] * ci;
        }
        if a[j][j].abs() < 1e-300 {
            return Err(Error::invalid("polynomial fit", "the design is singular"));
        }
        c[j] = s / a[j][j];
    }
    Ok((c, centre, half))
}

/// Evaluate a polynomial from [`fit_poly`] at `x`.
pub fn eval_poly(coeffs: &[f64], centre: f64, half_range: f64, x: f64) -> f64 {
    let u = (x - centre) / half_range;
    coeffs.iter().rev().fold(0.0, |acc, &c| acc * u + c)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn line_fit_recovers_an_exact_line_and_reports_scatter() {
        let x = [1.0, 2.0, 3.0, 4.0];
        let y: Vec<f64> = x.iter().map(|v| 3.0 * v - 2.0).collect();
        let f = fit_line(&x, &y).unwrap();
        assert!((f.slope - 3.0).abs() < 1e-12 && (f.intercept + 2.0).abs() < 1e-12);
        assert!(f.slope_err < 1e-12);
        // Residuals ±1 alternating on four points: Σr² known by hand.
        let y2 = [2.0, 3.0, 6.0, 7.0];
        let g = fit_line(&x, &y2).unwrap();
        // Hand calculation: slope = Σ(x−x̄)(y−ȳ)/Σ(x−x̄)² = 9.0/5.0.
        assert!((g.slope - 1.8).abs() < 1e-12);
        assert!(g.slope_err > 0.1);
        assert!(fit_line(&[1.0, 1.0], &[0.0, 1.0]).is_err());
        assert!(fit_line(&[1.0], &[0.0]).is_err());
    }

    #[test]
    fn polynomial_fit_is_exact_for_a_cubic() {
        let x: Vec<f64> = (0..40).map(|i| 0.1 + 0.02 * i as f64).collect();
        let f = |v: f64| 2.0 - 3.0 * v + 0.5 * v * v * v;
        let y: Vec<f64> = x.iter().map(|&v| f(v)).collect();
        let (c, m, h) = fit_poly(&x, &y, 3).unwrap();
        for &v in &[0.1, 0.45, 0.88] {
            assert!((eval_poly(&c, m, h, v) - f(v)).abs() < 1e-10);
        }
        assert!(fit_poly(&x[..3], &y[..3], 3).is_err());
    }
}

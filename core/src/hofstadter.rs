//! Hofstadter spectrum of the square lattice from Harper's equation, its gaps and their
//! Chern numbers, and a ranking of Wannier lines by the size of the gap they follow.
//!
//! Model: H = −t Σ e^{iθ_ij} c†_i c_j, nearest-neighbour hopping t = 1 (energies below are in
//! units of t), flux α = p/q per plaquette in units of φ₀ = h/e. In the Landau gauge the Bloch
//! Hamiltonian is the q×q Harper matrix
//! H_mm = −2 cos(k_y + 2π α m), H_m,m+1 = −1, closing H_{q−1,0} = −e^{i q k_x}.
//! Its characteristic polynomial depends on k only through cos(q k_x) + cos(q k_y) (Chambers'
//! relation), so the edges of every band are its eigenvalues at k = (0, 0) and (π/q, π/q), where
//! the matrix is real symmetric.
//!
//! Chern numbers: the gap above r filled bands has (t_r, s_r) solving the Diophantine equation
//! r = t_r p + s_r q with |t_r| ≤ q/2. Sign convention: t_r is the Středa slope,
//! σ_xy = e (∂n/∂B) = t_r e²/h with n/n₀ = t_r α + s_r, the same t as in the line model
//! n(B) = t (e/h) B + s n₀. A Berry-curvature calculation with the opposite orientation of the
//! Brillouin zone (or of B) returns −t_r.

use crate::error::{Error, Result};
use crate::line::Line;
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Largest q accepted (the q×q matrix is diagonalised densely).
pub const Q_LIMIT: i64 = 400;

/// One magnetic sub-band, energies in units of the hopping t.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Band {
    /// Lowest energy of the band.
    pub e_min: f64,
    /// Highest energy of the band.
    pub e_max: f64,
}

/// An open gap of the spectrum, above `r` filled bands.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct SpectralGap {
    /// Number of filled bands below the gap (1 ≤ r ≤ q − 1); the density is n/n₀ = r/q.
    pub r: i64,
    /// Top of the band below, in units of t.
    pub e_low: f64,
    /// Bottom of the band above, in units of t.
    pub e_high: f64,
    /// Chern number t_r (Středa slope; Hall conductance in e²/h).
    pub t: i64,
    /// Intercept s_r in carriers per cell.
    pub s: i64,
}

impl SpectralGap {
    /// Gap width in units of t.
    pub fn width(&self) -> f64 {
        self.e_high - self.e_low
    }
}

/// Bands and open gaps of the square lattice at one rational flux.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Spectrum {
    /// Flux per plaquette α = p/q (reduced into (0, 1]).
    pub flux: Rational,
    /// The q bands, in increasing energy.
    pub bands: Vec<Band>,
    /// The open gaps (touching bands, as at E = 0 for even q, leave no gap).
    pub gaps: Vec<SpectralGap>,
}

/// Gaps narrower than this (in units of t) count as closed.
pub const CLOSED_GAP: f64 = 1e-9;

fn check_flux(flux: Rational) -> Result<(i64, i64)> {
    if flux.numer() <= 0 {
        return Err(Error::invalid(
            "flux per plaquette",
            format!("{flux}: expected a positive fraction p/q"),
        ));
    }
    let q = flux.denom();
    if q > Q_LIMIT {
        return Err(Error::invalid(
            "flux per plaquette",
            format!("{flux}: denominator above {Q_LIMIT}"),
        ));
    }
    // The spectrum is periodic in α with period 1.
    let p = flux.numer().rem_euclid(q);
    Ok((if p == 0 { q } else { p }, q))
}

/// Real symmetric Harper matrix at k_x ∈ {0, π/q} (`kx_pi_over_q`) and k_y, row-major q×q.
fn harper_real(p: i64, q: i64, kx_pi_over_q: bool, ky: f64) -> Vec<f64> {
    let n = q as usize;
    let mut h = vec![0.0; n * n];
    let alpha = p as f64 / q as f64;
    for m in 0..n {
        h[m * n + m] = -2.0 * (ky + 2.0 * std::f64::consts::PI * alpha * m as f64).cos();
    }
    for m in 0..n.saturating_sub(1) {
        h[m * n + m + 1] += -1.0;
        h[(m + 1) * n + m] += -1.0;
    }
    // −e^{i q k_x}: −1 at k_x = 0, +1 at k_x = π/q.
    let w = if kx_pi_over_q { 1.0 } else { -1.0 };
    if n == 1 {
        h[0] += 2.0 * w;
    } else {
        h[(n - 1) * n] += w;
        h[n - 1] += w;
    }
    h
}

/// Eigenvalues of a real symmetric n×n matrix (row-major) by cyclic Jacobi rotations, sorted.
pub fn symmetric_eigenvalues(mut a: Vec<f64>, n: usize) -> Vec<f64> {
    for _sweep in 0..100 {
        let mut off = 0.0;
        let mut diag = 0.0;
        for i in 0..n {
            diag += a[i * n + i] * a[i * n + i];
            for j in (i + 1)..n {
                off += a[i * n + j] * a[i * n + j];
            }
        }
        if off <= 1e-30 * diag.max(1e-300) || off == 0.0 {
            break;
        }
        for p in 0..n {
            for q in (p + 1)..n {
                let apq = a[p * n + q];
                if apq == 0.0 {
                    continue;
                }
                let app = a[p * n + p];
                let aqq = a[q * n + q];
                let theta = (aqq - app) / (2.0 * apq);
                let t = theta.signum() / (theta.abs() + (theta * theta + 1.0).sqrt());
                let t = if theta == 0.0 { 1.0 } else { t };
                let c = 1.0 / (t * t + 1.0).sqrt();
                let s = t * c;
                for k in 0..n {
                    let akp = a[k * n + p];
                    let akq = a[k * n + q];
                    a[k * n + p] = c * akp - s * akq;
                    a[k * n + q] = s * akp + c * akq;
                }
                for k in 0..n {
                    let apk = a[p * n + k];
                    let aqk = a[q * n + k];
                    a[p * n + k] = c * apk - s * aqk;
                    a[q * n + k] = s * apk + c * aqk;
                }
            }
        }
    }
    let mut ev: Vec<f64> = (0..n).map(|i| a[i * n + i]).collect();
    ev.sort_by(f64::total_cmp);
    ev
}

/// Energies (units of t, sorted) of the Harper matrix at k_x ∈ {0, π/q} and any k_y.
pub fn harper_energies(flux: Rational, kx_pi_over_q: bool, ky: f64) -> Result<Vec<f64>> {
    let (p, q) = check_flux(flux)?;
    Ok(symmetric_eigenvalues(
        harper_real(p, q, kx_pi_over_q, ky),
        q as usize,
    ))
}

/// The q bands of the square lattice at flux α = `flux` (units of t), from the Chambers points.
pub fn square_lattice_bands(flux: Rational) -> Result<Vec<Band>> {
    let (p, q) = check_flux(flux)?;
    let a = symmetric_eigenvalues(harper_real(p, q, false, 0.0), q as usize);
    let b = symmetric_eigenvalues(
        harper_real(p, q, true, std::f64::consts::PI / q as f64),
        q as usize,
    );
    Ok(a.iter()
        .zip(&b)
        .map(|(&x, &y)| Band {
            e_min: x.min(y),
            e_max: x.max(y),
        })
        .collect())
}

/// (t_r, s_r) with r = t_r p + s_r q and |t_r| ≤ q/2 (for even q and |t_r| = q/2 the positive
/// t_r is returned; such gaps are closed). Needs gcd(p, q) = 1 and q ≥ 1.
pub fn diophantine(r: i64, p: i64, q: i64) -> Result<(i64, i64)> {
    let f = Rational::new(p, q).map_err(|e| Error::invalid("flux", e.to_string()))?;
    if q < 1 || f.denom() != q {
        return Err(Error::invalid(
            "flux",
            format!("{p}/{q}: expected coprime p and q ≥ 1"),
        ));
    }
    if q == 1 {
        // α integer: every t works with s = r − t p; take t = 0.
        return Ok((0, r));
    }
    // Inverse of p mod q by the extended Euclidean algorithm.
    let (mut old_r, mut rr) = (p.rem_euclid(q) as i128, q as i128);
    let (mut old_s, mut ss) = (1i128, 0i128);
    while rr != 0 {
        let quo = old_r / rr;
        (old_r, rr) = (rr, old_r - quo * rr);
        (old_s, ss) = (ss, old_s - quo * ss);
    }
    let inv = old_s.rem_euclid(q as i128);
    let mut t = ((r as i128 * inv).rem_euclid(q as i128)) as i64;
    if 2 * t > q {
        t -= q;
    }
    let rem = r as i128 - t as i128 * p as i128;
    let s = (rem / q as i128) as i64;
    Ok((t, s))
}

/// Bands, open gaps and their Chern numbers at flux `flux`.
pub fn square_lattice_spectrum(flux: Rational) -> Result<Spectrum> {
    let (p, q) = check_flux(flux)?;
    let bands = square_lattice_bands(flux)?;
    let mut gaps = Vec::new();
    for (i, w) in bands.windows(2).enumerate() {
        if w[1].e_min - w[0].e_max > CLOSED_GAP {
            let r = i as i64 + 1;
            let (t, s) = diophantine(r, p, q)?;
            gaps.push(SpectralGap {
                r,
                e_low: w[0].e_max,
                e_high: w[1].e_min,
                t,
                s,
            });
        }
    }
    Ok(Spectrum {
        flux: Rational::new(p, q).map_err(|e| Error::invalid("flux", e.to_string()))?,
        bands,
        gaps,
    })
}

/// A Wannier line's strength in the square-lattice model: its widest gap and where.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct GapRank {
    /// Index of the line in the slice given to [`rank_lines_by_gap`].
    pub line_index: usize,
    /// Widest gap the line follows, in units of t (0 when it follows none).
    pub widest_gap: f64,
    /// Flux p/q at which that gap is widest (None when it follows none).
    pub at_flux: Option<Rational>,
}

/// Ranks lines by the widest square-lattice gap they follow over all fluxes p/q in (0, 1) with
/// q ≤ `q_max`, widest first. A line (t, s) with integer t and s follows gap r at flux p/q when
/// t p + s q ≡ r (mod q), r ≠ 0, and the Diophantine solution of r is t: the model's single
/// band is repeated in s, so the same gap pattern recurs in every band filling. Lines with
/// fractional t or s, and Brown–Zak fields, rank last with width 0 (no single-particle gap).
pub fn rank_lines_by_gap(lines: &[Line], q_max: i64) -> Result<Vec<GapRank>> {
    if !(1..=Q_LIMIT).contains(&q_max) {
        return Err(Error::invalid(
            "q bound",
            format!("{q_max}: expected 1..={Q_LIMIT}"),
        ));
    }
    let mut spectra = Vec::new();
    for q in 2..=q_max {
        for p in 1..q {
            let f = Rational::new(p, q).map_err(|e| Error::invalid("flux", e.to_string()))?;
            if f.denom() == q {
                spectra.push(square_lattice_spectrum(f)?);
            }
        }
    }
    let mut out: Vec<GapRank> = lines
        .iter()
        .enumerate()
        .map(|(i, line)| {
            let mut best = GapRank {
                line_index: i,
                widest_gap: 0.0,
                at_flux: None,
            };
            let Some((t, s)) = line.ts() else { return best };
            if !(t.is_integer() && s.is_integer()) {
                return best;
            }
            let (t, s) = (t.numer() as i128, s.numer() as i128);
            for sp in &spectra {
                let (p, q) = (sp.flux.numer() as i128, sp.flux.denom() as i128);
                let r = (t * p + s * q).rem_euclid(q) as i64;
                if r == 0 {
                    continue;
                }
                if let Some(g) = sp.gaps.iter().find(|g| g.r == r) {
                    if g.t as i128 == t && g.width() > best.widest_gap {
                        best.widest_gap = g.width();
                        best.at_flux = Some(sp.flux);
                    }
                }
            }
            best
        })
        .collect();
    out.sort_by(|a, b| {
        b.widest_gap
            .total_cmp(&a.widest_gap)
            .then(a.line_index.cmp(&b.line_index))
    });
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::line::Family;

    fn r(p: i64, q: i64) -> Rational {
        Rational::new(p, q).unwrap()
    }

    #[test]
    fn zero_flux_band_is_minus_four_to_four() {
        // α = 1 ≡ 0: one band, E = −2(cos k_x + cos k_y) ∈ [−4, 4] (textbook tight binding).
        let b = square_lattice_bands(r(1, 1)).unwrap();
        assert_eq!(b.len(), 1);
        assert!((b[0].e_min + 4.0).abs() < 1e-12 && (b[0].e_max - 4.0).abs() < 1e-12);
    }

    #[test]
    fn chambers_edges_bound_a_k_scan() {
        // Energies at other k_y lie inside the Chambers band edges (consistency of the method).
        let f = r(3, 7);
        let bands = square_lattice_bands(f).unwrap();
        for i in 0..50 {
            let ky = i as f64 * 0.1;
            for kx in [false, true] {
                let e = harper_energies(f, kx, ky).unwrap();
                for (j, &ej) in e.iter().enumerate() {
                    assert!(ej >= bands[j].e_min - 1e-10 && ej <= bands[j].e_max + 1e-10);
                }
            }
        }
    }

    #[test]
    fn diophantine_solutions_satisfy_the_equation() {
        for q in 2..12i64 {
            for p in 1..q {
                if r(p, q).denom() != q {
                    continue;
                }
                for rr in 1..q {
                    let (t, s) = diophantine(rr, p, q).unwrap();
                    assert_eq!(t * p + s * q, rr);
                    assert!(2 * t.abs() <= q);
                }
            }
        }
        assert!(diophantine(1, 2, 4).is_err());
    }

    #[test]
    fn ranking_puts_the_integer_gap_first() {
        let lines = vec![
            Line::gap(Family::Wannier, "x", r(1, 3), r(1, 3)),
            Line::gap(Family::Wannier, "x", r(3, 1), r(-1, 1)),
            Line::gap(Family::Wannier, "x", r(1, 1), r(0, 1)),
        ];
        let rank = rank_lines_by_gap(&lines, 6).unwrap();
        assert_eq!(rank[0].line_index, 2);
        assert!(rank[0].widest_gap > rank[1].widest_gap);
        assert_eq!(rank[2].widest_gap, 0.0);
        assert!(rank_lines_by_gap(&lines, 0).is_err());
    }

    #[test]
    fn bad_flux_is_an_error() {
        assert!(square_lattice_bands(Rational::ZERO).is_err());
        assert!(square_lattice_bands(r(-1, 3)).is_err());
        assert!(square_lattice_bands(r(1, 1000)).is_err());
    }
}

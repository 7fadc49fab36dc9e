//! Generators of predicted line families, with bounds, producing de-duplicated [`Line`]s.
//!
//! - integer Landau-level sequences ν = g(N + offset) (monolayer 4(N+½): ±2, ±6, ±10…;
//!   bilayer 4N: ±4, ±8…; any degeneracy g and offset);
//! - symmetry-broken integers: every integer |ν| ≤ bound not in the degenerate sequence;
//! - composite-fermion sequences ν₀ + p/(2p±1) and ν₀ + p/(4p±1);
//! - Wannier (t, s) lines with bounded |t|, s range and denominators;
//! - satellite fans: the degenerate sequence re-centred on s = ±4 (or other centres);
//! - Brown–Zak fields φ/φ₀ = p/q with q ≤ q_max below a field bound.
//!
//! A line predicted twice is kept once, listing every membership; its primary family is the
//! first that produced it, in the order above.

use crate::error::{Error, Result};
use crate::line::{Family, Line, LineShape};
use crate::moire::Moire;
use crate::rational::{Rational, RationalError};
use serde::{Deserialize, Serialize};
use std::collections::HashMap;

/// Most lines one call may generate; larger bounds are refused rather than exhausting memory.
pub const MAX_LINES: usize = 2_000_000;

fn frac_err(e: RationalError) -> Error {
    Error::invalid("fraction", e.to_string())
}

fn rat(p: i64, q: i64) -> Result<Rational> {
    Rational::new(p, q).map_err(frac_err)
}

/// A degenerate Landau-level sequence ν = g (N + offset), N integer, ν ≠ 0.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct LandauSequence {
    /// Degeneracy g of each Landau level (4 for spin × valley in graphene).
    pub degeneracy: u32,
    /// Offset of the level index: ½ for monolayer graphene (Berry phase π), 0 otherwise.
    pub offset: Rational,
}

impl LandauSequence {
    /// Monolayer graphene, ν = 4(N + ½) = ±2, ±6, ±10, …
    pub fn monolayer() -> LandauSequence {
        LandauSequence {
            degeneracy: 4,
            offset: Rational::new(1, 2).unwrap_or(Rational::ZERO),
        }
    }
    /// Bernal bilayer graphene, ν = 4N = ±4, ±8, … (the zero-energy level is eight-fold, so no ν = 0).
    pub fn bilayer() -> LandauSequence {
        LandauSequence {
            degeneracy: 4,
            offset: Rational::ZERO,
        }
    }
    /// A general sequence of degeneracy `g` and offset (e.g. a spin-degenerate 2DEG: g = 2, 0).
    pub fn general(degeneracy: u32, offset: Rational) -> Result<LandauSequence> {
        if degeneracy == 0 {
            return Err(Error::invalid(
                "Landau-level degeneracy",
                "0: expected a positive integer",
            ));
        }
        Ok(LandauSequence { degeneracy, offset })
    }

    /// The fillings ν = g(N + offset) with 0 < |ν| ≤ `nu_max`, in increasing order.
    pub fn fillings(&self, nu_max: Rational) -> Result<Vec<Rational>> {
        if self.degeneracy == 0 {
            return Err(Error::invalid("Landau-level degeneracy", "0"));
        }
        let g = self.degeneracy as i64;
        let bound = nu_max.abs().to_f64() / g as f64 + self.offset.abs().to_f64() + 1.0;
        let n_lim = bound.ceil() as i64;
        let mut out = Vec::new();
        for n in -n_lim..=n_lim {
            let nu = Rational::integer(n)
                .checked_add(self.offset)
                .and_then(|x| x.checked_mul(Rational::integer(g)))
                .map_err(frac_err)?;
            if !nu.is_zero() && nu.abs() <= nu_max.abs() {
                out.push(nu);
            }
        }
        out.sort();
        out.dedup();
        Ok(out)
    }

    fn name(&self) -> String {
        if self.offset.is_zero() {
            format!("{}N", self.degeneracy)
        } else {
            format!("{}(N+{})", self.degeneracy, self.offset)
        }
    }
}

/// Bounds of the integer family: |ν| ≤ `nu_max`.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct IntegerSpec {
    /// Largest |ν|.
    pub nu_max: i64,
}

/// Bounds of the symmetry-broken integers: |ν| ≤ `nu_max` (ν = 0 included).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct BrokenSymmetrySpec {
    /// Largest |ν|.
    pub nu_max: i64,
}

/// Composite-fermion sequences ν₀ + p/(2p±1) (two flux) and ν₀ + p/(4p±1) (four flux).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct CompositeFermionSpec {
    /// Smallest integer offset ν₀.
    pub nu0_min: i64,
    /// Largest integer offset ν₀.
    pub nu0_max: i64,
    /// Largest p (p = 1, 2, …).
    pub p_max: i64,
    /// Include ν₀ + p/(2p±1).
    pub two_flux: bool,
    /// Include ν₀ + p/(4p±1).
    pub four_flux: bool,
}

/// Wannier (t, s) lines.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
pub struct WannierSpec {
    /// Largest |t|.
    pub t_max: Rational,
    /// Smallest s (carriers per moiré cell).
    pub s_min: Rational,
    /// Largest s.
    pub s_max: Rational,
    /// Largest denominator of s (1: integer s; > 1 adds symmetry-broken Chern states).
    pub s_den_max: i64,
    /// Largest denominator of t (1: integer Chern numbers; > 1 adds fractional Chern insulators).
    pub t_den_max: i64,
    /// When true, a fractional t is kept only with an s whose denominator it divides (the
    /// fractional Chern insulator occupies an enlarged cell; fractional t at integer s is a
    /// fractional quantum Hall state, covered by the composite-fermion family).
    pub fractional_t_needs_fractional_s: bool,
}

/// Satellite fans: the degenerate sequence, with t in it and |t| ≤ `t_max`, re-centred on each s.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct SatelliteSpec {
    /// Centres s (carriers per cell), typically ±4 and optionally ±2.
    pub centres: Vec<Rational>,
    /// Largest |t|.
    pub t_max: i64,
}

/// Brown–Zak fields φ/φ₀ = p/q, q ≤ `q_max`, 0 < B ≤ `b_max_t`.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct BrownZakSpec {
    /// Largest denominator q.
    pub q_max: i64,
    /// Largest field in T.
    pub b_max_t: f64,
}

/// Which families to generate, and their bounds. Stored with projects.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FamilySpec {
    /// The device's degenerate Landau-level sequence (used by integer, broken-symmetry and
    /// satellite families).
    pub landau: LandauSequence,
    /// Integer family, if wanted.
    pub integer: Option<IntegerSpec>,
    /// Symmetry-broken integers, if wanted.
    pub broken_symmetry: Option<BrokenSymmetrySpec>,
    /// Composite-fermion sequences, if wanted.
    pub composite_fermion: Option<CompositeFermionSpec>,
    /// Satellite fans, if wanted (need a moiré cell to draw).
    pub satellite: Option<SatelliteSpec>,
    /// Wannier lines, if wanted (need a moiré cell to draw).
    pub wannier: Option<WannierSpec>,
    /// Brown–Zak fields, if wanted (need a moiré cell).
    pub brown_zak: Option<BrownZakSpec>,
}

impl FamilySpec {
    /// Only the degenerate integer sequence up to |ν| ≤ `nu_max`.
    pub fn integers(landau: LandauSequence, nu_max: i64) -> FamilySpec {
        FamilySpec {
            landau,
            integer: Some(IntegerSpec { nu_max }),
            broken_symmetry: None,
            composite_fermion: None,
            satellite: None,
            wannier: None,
            brown_zak: None,
        }
    }
}

/// The list of ν values p/(k p + sign) for p = 1..=p_max (k = 2 or 4, sign = ±1), integer
/// values included (p/(2p−1) at p = 1 is 1).
pub fn jain_sequence(k: i64, sign: i64, p_max: i64) -> Result<Vec<Rational>> {
    if !(k > 0 && (sign == 1 || sign == -1)) {
        return Err(Error::invalid(
            "composite-fermion sequence",
            format!("k = {k}, sign = {sign}: expected k > 0 and sign ±1"),
        ));
    }
    (1..=p_max.max(0)).map(|p| rat(p, k * p + sign)).collect()
}

/// De-duplicating collector: one line per shape, memberships merged.
struct Collector {
    lines: Vec<Line>,
    index: HashMap<LineShape, usize>,
}

impl Collector {
    fn push(&mut self, line: Line) -> Result<()> {
        if let Some(&i) = self.index.get(&line.shape) {
            self.lines[i].merge_memberships(&line);
            return Ok(());
        }
        if self.lines.len() >= MAX_LINES {
            return Err(Error::invalid(
                "family bounds",
                format!("they would generate more than {MAX_LINES} lines; tighten them"),
            ));
        }
        self.index.insert(line.shape, self.lines.len());
        self.lines.push(line);
        Ok(())
    }
}

/// Fractions num/den in [lo, hi] with den ≤ `den_max`, reduced, in increasing order.
fn fractions_in(lo: Rational, hi: Rational, den_max: i64) -> Result<Vec<Rational>> {
    if den_max < 1 {
        return Err(Error::invalid(
            "denominator bound",
            format!("{den_max}: expected at least 1"),
        ));
    }
    let mut out = Vec::new();
    if hi < lo {
        return Ok(out);
    }
    for den in 1..=den_max {
        let n_lo = (lo.to_f64() * den as f64).floor() as i64 - 1;
        let n_hi = (hi.to_f64() * den as f64).ceil() as i64 + 1;
        if (n_hi - n_lo) as usize > MAX_LINES {
            return Err(Error::invalid(
                "family bounds",
                "range too wide for the denominator bound",
            ));
        }
        for num in n_lo..=n_hi {
            let f = rat(num, den)?;
            if f.denom() == den && f >= lo && f <= hi {
                out.push(f);
            }
        }
    }
    out.sort();
    Ok(out)
}

fn check_bound(what: &str, v: i64) -> Result<()> {
    if v < 0 {
        Err(Error::invalid(
            what,
            format!("{v}: expected a non-negative bound"),
        ))
    } else {
        Ok(())
    }
}

/// Generates every line `spec` asks for, de-duplicated, sorted by primary family, then s, then
/// t (Brown–Zak fields by flux). `moire` is needed only for Brown–Zak fields (their field bound).
pub fn generate(spec: &FamilySpec, moire: Option<&Moire>) -> Result<Vec<Line>> {
    let mut c = Collector {
        lines: Vec::new(),
        index: HashMap::new(),
    };
    let zero = Rational::ZERO;
    let seq_name = spec.landau.name();

    if let Some(i) = spec.integer {
        check_bound("integer ν bound", i.nu_max)?;
        for nu in spec.landau.fillings(Rational::integer(i.nu_max))? {
            c.push(Line::gap(Family::Integer, seq_name.clone(), nu, zero))?;
        }
    }

    if let Some(b) = spec.broken_symmetry {
        check_bound("broken-symmetry ν bound", b.nu_max)?;
        let degenerate = spec.landau.fillings(Rational::integer(b.nu_max))?;
        for nu in -b.nu_max..=b.nu_max {
            let r = Rational::integer(nu);
            if !degenerate.contains(&r) {
                c.push(Line::gap(
                    Family::BrokenSymmetry,
                    format!("lifted degeneracy of {seq_name}"),
                    r,
                    zero,
                ))?;
            }
        }
    }

    if let Some(cf) = spec.composite_fermion {
        check_bound("composite-fermion p bound", cf.p_max)?;
        if cf.nu0_max < cf.nu0_min {
            return Err(Error::invalid(
                "composite-fermion ν₀ range",
                format!("{}..{} is empty", cf.nu0_min, cf.nu0_max),
            ));
        }
        let mut ks = Vec::new();
        if cf.two_flux {
            ks.push(2);
        }
        if cf.four_flux {
            ks.push(4);
        }
        for nu0 in cf.nu0_min..=cf.nu0_max {
            for &k in &ks {
                for sign in [1i64, -1] {
                    let sign_text = if sign > 0 { '+' } else { '-' };
                    for (i, f) in jain_sequence(k, sign, cf.p_max)?.into_iter().enumerate() {
                        let nu = Rational::integer(nu0).checked_add(f).map_err(frac_err)?;
                        if nu.is_integer() {
                            continue;
                        }
                        c.push(Line::gap(
                            Family::CompositeFermion,
                            format!("{nu0} + p/({k}p{sign_text}1), p={}", i + 1),
                            nu,
                            zero,
                        ))?;
                    }
                }
            }
        }
    }

    if let Some(sat) = &spec.satellite {
        check_bound("satellite t bound", sat.t_max)?;
        let ts = spec.landau.fillings(Rational::integer(sat.t_max))?;
        for &centre in &sat.centres {
            c.push(Line::gap(
                Family::Satellite,
                format!("band edge s={centre}"),
                zero,
                centre,
            ))?;
            for &t in &ts {
                c.push(Line::gap(
                    Family::Satellite,
                    format!("{seq_name} from s={centre}"),
                    t,
                    centre,
                ))?;
            }
        }
    }

    if let Some(w) = spec.wannier {
        let ts = fractions_in(
            Rational::ZERO
                .checked_sub(w.t_max.abs())
                .map_err(frac_err)?,
            w.t_max.abs(),
            w.t_den_max,
        )?;
        let ss = fractions_in(w.s_min, w.s_max, w.s_den_max)?;
        let name = format!(
            "|t|<={}, s in [{}, {}], den(t)<={}, den(s)<={}",
            w.t_max, w.s_min, w.s_max, w.t_den_max, w.s_den_max
        );
        for &s in &ss {
            for &t in &ts {
                if t.is_zero() && s.is_zero() {
                    continue;
                }
                if w.fractional_t_needs_fractional_s
                    && !t.is_integer()
                    && s.denom() % t.denom() != 0
                {
                    continue;
                }
                c.push(Line::gap(Family::Wannier, name.clone(), t, s))?;
            }
        }
    }

    if let Some(bz) = spec.brown_zak {
        check_bound("Brown–Zak q bound", bz.q_max)?;
        let m = moire.ok_or_else(|| {
            Error::invalid(
                "Brown–Zak fields",
                "need a moiré cell (wavelength, twist or n₀)",
            )
        })?;
        if !(bz.b_max_t.is_finite() && bz.b_max_t > 0.0) {
            return Err(Error::invalid(
                "Brown–Zak field bound",
                format!("{} T: expected a positive field", bz.b_max_t),
            ));
        }
        let b1 = m.one_flux_field_t();
        let p_lim = (bz.b_max_t / b1 * bz.q_max as f64).floor();
        if p_lim > MAX_LINES as f64 {
            return Err(Error::invalid(
                "family bounds",
                format!(
                    "Brown–Zak fields up to {} T would exceed {MAX_LINES} lines",
                    bz.b_max_t
                ),
            ));
        }
        for q in 1..=bz.q_max {
            let p_max = (bz.b_max_t / b1 * q as f64).floor() as i64;
            for p in 1..=p_max {
                let f = rat(p, q)?;
                if f.denom() != q || m.brown_zak_field_t(f) > bz.b_max_t {
                    continue;
                }
                c.push(Line::brown_zak(format!("p/q, q<={}", bz.q_max), f))?;
            }
        }
    }

    let mut lines = c.lines;
    lines.sort_by(|a, b| {
        a.family
            .cmp(&b.family)
            .then_with(|| sort_key(a).cmp(&sort_key(b)))
    });
    Ok(lines)
}

fn sort_key(l: &Line) -> (Rational, Rational) {
    match l.shape {
        LineShape::Gap { t, s } => (s, t),
        LineShape::ConstantFlux { flux } => (flux, Rational::ZERO),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn r(p: i64, q: i64) -> Rational {
        Rational::new(p, q).unwrap()
    }

    #[test]
    fn bilayer_sequence_has_no_zero() {
        let f = LandauSequence::bilayer().fillings(r(12, 1)).unwrap();
        let want: Vec<_> = [-12, -8, -4, 4, 8, 12].map(Rational::integer).to_vec();
        assert_eq!(f, want);
    }

    #[test]
    fn broken_symmetry_complements_the_sequence() {
        let spec = FamilySpec {
            broken_symmetry: Some(BrokenSymmetrySpec { nu_max: 6 }),
            ..FamilySpec::integers(LandauSequence::monolayer(), 6)
        };
        let lines = generate(&spec, None).unwrap();
        assert_eq!(lines.len(), 13, "every integer from −6 to 6 exactly once");
        let broken: Vec<i64> = lines
            .iter()
            .filter(|l| l.family == Family::BrokenSymmetry)
            .map(|l| l.ts().unwrap().0.numer())
            .collect();
        assert_eq!(broken, vec![-5, -4, -3, -1, 0, 1, 3, 4, 5]);
    }

    #[test]
    fn wannier_lines_merge_with_integer_lines() {
        let spec = FamilySpec {
            wannier: Some(WannierSpec {
                t_max: r(4, 1),
                s_min: r(-4, 1),
                s_max: r(4, 1),
                s_den_max: 1,
                t_den_max: 1,
                fractional_t_needs_fractional_s: true,
            }),
            ..FamilySpec::integers(LandauSequence::monolayer(), 4)
        };
        let lines = generate(&spec, None).unwrap();
        // 9 × 9 (t, s) pairs minus (0, 0); ν = ±2 are shared with the integer family.
        assert_eq!(lines.len(), 80);
        let two = lines
            .iter()
            .find(|l| l.ts() == Some((r(2, 1), Rational::ZERO)))
            .unwrap();
        assert_eq!(two.family, Family::Integer);
        assert!(two.is_in(Family::Wannier));
    }

    #[test]
    fn fractional_t_rule_filters() {
        let w = WannierSpec {
            t_max: r(1, 1),
            s_min: r(0, 1),
            s_max: r(1, 1),
            s_den_max: 3,
            t_den_max: 3,
            fractional_t_needs_fractional_s: true,
        };
        let spec = FamilySpec {
            integer: None,
            wannier: Some(w),
            ..FamilySpec::integers(LandauSequence::monolayer(), 0)
        };
        let lines = generate(&spec, None).unwrap();
        assert!(lines.iter().any(|l| l.ts() == Some((r(2, 3), r(1, 3)))));
        assert!(!lines.iter().any(|l| l.ts() == Some((r(2, 3), r(1, 2)))));
        assert!(!lines.iter().any(|l| l.ts() == Some((r(1, 3), r(1, 1)))));
    }

    #[test]
    fn bad_bounds_are_errors() {
        let spec = FamilySpec {
            brown_zak: Some(BrownZakSpec {
                q_max: 3,
                b_max_t: 10.0,
            }),
            ..FamilySpec::integers(LandauSequence::monolayer(), 4)
        };
        assert!(generate(&spec, None).is_err(), "Brown–Zak needs a cell");
        assert!(LandauSequence::general(0, Rational::ZERO).is_err());
        assert!(jain_sequence(2, 0, 3).is_err());
        let neg = FamilySpec::integers(LandauSequence::monolayer(), -1);
        assert!(generate(&neg, None).is_err());
    }
}

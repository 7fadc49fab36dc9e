//! The stack of the device: its degenerate Landau-level sequence and which line families are
//! searched for, with their bounds.

use super::score::Candidate;
use crate::error::{Error, Result};
use crate::families::{
    generate, BrokenSymmetrySpec, CompositeFermionSpec, FamilySpec, IntegerSpec, LandauSequence,
    SatelliteSpec, WannierSpec,
};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};
use std::str::FromStr;

/// The kind of device stack.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Stack {
    /// Monolayer graphene without a superlattice: ν = ±2, ±6, ±10, …
    Monolayer,
    /// Bernal bilayer graphene: ν = ±4, ±8, …
    Bilayer,
    /// Monolayer graphene with a moiré superlattice (e.g. aligned to hBN): main fan, satellite
    /// fans from s = ±4 and Wannier (t, s) lines.
    MonolayerMoire,
}

impl Stack {
    /// Name used on the command line and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            Stack::Monolayer => "monolayer",
            Stack::Bilayer => "bilayer",
            Stack::MonolayerMoire => "monolayer-moire",
        }
    }

    /// True when the stack has a moiré superlattice.
    pub fn is_moire(self) -> bool {
        matches!(self, Stack::MonolayerMoire)
    }

    /// The degenerate Landau-level sequence of the stack.
    pub fn landau(self) -> LandauSequence {
        match self {
            Stack::Bilayer => LandauSequence::bilayer(),
            _ => LandauSequence::monolayer(),
        }
    }

    /// The degenerate sequence's positive members up to `nu_max`.
    pub fn sequence(self, nu_max: i64) -> Vec<i64> {
        self.landau()
            .fillings(Rational::integer(nu_max))
            .unwrap_or_default()
            .into_iter()
            .filter(|r| r.is_integer() && r.numer() > 0)
            .map(|r| r.numer())
            .collect()
    }

    /// The families searched for.
    pub fn family_spec(self) -> FamilySpec {
        let r = |p: i64, q: i64| Rational::new(p, q).unwrap_or(Rational::ZERO);
        let moire = self.is_moire();
        FamilySpec {
            landau: self.landau(),
            integer: Some(IntegerSpec { nu_max: 64 }),
            broken_symmetry: Some(BrokenSymmetrySpec {
                nu_max: if moire { 8 } else { 12 },
            }),
            composite_fermion: Some(CompositeFermionSpec {
                nu0_min: -3,
                nu0_max: 2,
                p_max: 3,
                two_flux: true,
                four_flux: false,
            }),
            satellite: moire.then(|| SatelliteSpec {
                centres: vec![Rational::integer(-4), Rational::integer(4)],
                t_max: 14,
            }),
            wannier: moire.then(|| WannierSpec {
                t_max: Rational::integer(4),
                s_min: r(-9, 2),
                s_max: r(9, 2),
                s_den_max: 3,
                t_den_max: 3,
                fractional_t_needs_fractional_s: true,
            }),
            brown_zak: None,
        }
    }

    /// Candidate lines of the stack's families. On a moiré stack a line of slope t = 0 is a
    /// gap already open at zero field; in the single-particle Wannier diagram of graphene on
    /// hBN those are charge neutrality and the full fillings s = ±4 of the first minibands,
    /// so other (0, s) lines (which would be correlated insulators, not expected in this
    /// stack) are not searched: at low field they would only pick up the resistance bump
    /// where the Hall sign reverses near |s| ≈ 2.
    pub fn candidates(self) -> Result<Vec<Candidate>> {
        let full = Rational::integer(4);
        Ok(generate(&self.family_spec(), None)?
            .into_iter()
            .filter_map(Candidate::from_line)
            .filter(|c| !(c.t.is_zero() && !c.s.is_zero() && c.s.abs() != full))
            .collect())
    }
}

impl FromStr for Stack {
    type Err = Error;
    fn from_str(s: &str) -> Result<Stack> {
        match s.trim().to_ascii_lowercase().replace('_', "-").as_str() {
            "monolayer" | "mlg" => Ok(Stack::Monolayer),
            "bilayer" | "blg" => Ok(Stack::Bilayer),
            "monolayer-moire" | "moire" | "graphene-hbn" => Ok(Stack::MonolayerMoire),
            _ => Err(Error::invalid(
                "stack",
                format!("`{s}`: expected monolayer, bilayer or monolayer-moire"),
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn moire_zero_slope_candidates_are_only_the_zero_field_band_gaps() {
        let c = Stack::MonolayerMoire.candidates().unwrap();
        let zero_slope: Vec<Rational> = c.iter().filter(|x| x.t.is_zero()).map(|x| x.s).collect();
        for s in [-4, 4] {
            assert!(
                zero_slope.contains(&Rational::integer(s)),
                "(0, {s}) missing"
            );
        }
        assert!(zero_slope
            .iter()
            .all(|s| s.is_zero() || s.abs() == Rational::integer(4)));
        // Sloped Wannier lines through s = ±2 stay.
        assert!(c
            .iter()
            .any(|x| x.t == Rational::integer(-1) && x.s == Rational::integer(2)));
    }
}

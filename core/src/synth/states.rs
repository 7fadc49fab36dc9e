//! The list of gapped states each synthetic device has, with the law by which each gap grows
//! with field and the width of its plateau.
//!
//! Every state is a line n(B) = t·(e/h)·B + s·n₀ (s = 0 for a device without a superlattice).

use super::device::{Device, DeviceName};
use crate::constants::{ELEMENTARY_CHARGE, HBAR};
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// What kind of gap a state is, as recorded in the truth file.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StateKind {
    /// A degenerate Landau-level gap of the main Dirac cone (monolayer ν = ±4(N+½)).
    Integer,
    /// An integer gap from broken spin/valley symmetry, or a Chern state with fractional s.
    BrokenSymmetry,
    /// A fractional quantum Hall state (composite-fermion sequence) or a fractional Chern
    /// insulator (fractional t).
    Fractional,
    /// A Wannier-diagram line with integer (t, s), s ≠ 0: satellite fans, Hofstadter minigaps
    /// and the band insulators at full filling.
    Wannier,
    /// A horizontal Brown–Zak feature at φ/φ₀ = 1/q.
    BrownZak,
}

/// How a state's intrinsic gap Δ (in K) depends on the field magnitude |B|.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub enum GapLaw {
    /// Spacing E_{N+1} − E_N of a Dirac cone's Landau levels, E_N = v√(2eħ|B|N).
    DiracLevels {
        /// Index N of the level below the gap.
        lower_level: u32,
        /// Dirac velocity, m/s.
        velocity: f64,
    },
    /// Interaction (Coulomb-like) gap Δ = k·(√|B| − √b₀)₊, k in K T^−½.
    Coulomb {
        /// Prefactor, K T^−½.
        k: f64,
        /// Field below which the state has no gap, T.
        b0: f64,
    },
    /// Gap growing linearly, Δ = k·(|B| − b₀)₊, k in K/T.
    Linear {
        /// Slope, K/T.
        k: f64,
        /// Field below which the state has no gap, T.
        b0: f64,
    },
    /// A band gap present at zero field, Δ in K.
    Constant {
        /// Gap, K.
        k: f64,
    },
}

impl GapLaw {
    /// Intrinsic gap Δ in K at field `b_t` (T), before disorder broadening.
    pub fn gap_k(&self, b_t: f64) -> f64 {
        let b = b_t.abs();
        match *self {
            GapLaw::DiracLevels {
                lower_level,
                velocity,
            } => {
                let e1 = velocity * (2.0 * ELEMENTARY_CHARGE * HBAR * b).sqrt();
                let n = lower_level as f64;
                e1 * ((n + 1.0).sqrt() - n.sqrt()) / crate::constants::BOLTZMANN_K
            }
            GapLaw::Coulomb { k, b0 } => k * (b.sqrt() - b0.sqrt()).max(0.0),
            GapLaw::Linear { k, b0 } => k * (b - b0).max(0.0),
            GapLaw::Constant { k } => k,
        }
    }
}

/// Where in density a state's line exists, for a device with a superlattice (the main-cone
/// Landau levels give way to the satellite cones' beyond |s| ≈ 2).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Domain {
    /// At every density.
    Everywhere,
    /// Only where |n/n₀| < 2 (main Dirac cone).
    MainCone,
    /// Only beyond |n/n₀| > 2 on the side of its own satellite cone (sign of s).
    SatelliteCone,
}

impl Domain {
    /// Weight in [0, 1] with which a state of this domain and intercept `s` acts at filling
    /// n/n₀ = `s_here` (1 where it exists, 0 where it does not, smooth over ±0.3).
    pub fn weight(self, s: f64, s_here: f64) -> f64 {
        let step = |x: f64| 0.5 * (1.0 + (x / 0.3).tanh());
        match self {
            Domain::Everywhere => 1.0,
            Domain::MainCone => step(2.0 - s_here.abs()),
            Domain::SatelliteCone => step(s.signum() * s_here - 2.0),
        }
    }
}

/// One gapped state of a synthetic device.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct SynthState {
    /// Kind of gap.
    pub kind: StateKind,
    /// Slope t of the line in units of e/h (the Hall conductance in e²/h by Středa).
    pub t: Rational,
    /// Intercept s of the line in units of n₀.
    pub s: Rational,
    /// How the intrinsic gap grows with field.
    pub gap: GapLaw,
    /// True for interaction-driven gaps, which are broadened by the smaller disorder scale.
    pub interaction: bool,
    /// Plateau half-width at full development, in units of (e/h)|B| (filling-factor units).
    pub width_flux: f64,
    /// Plateau half-width that does not scale with field, in units of n₀ (band insulators).
    pub width_fixed_n0: f64,
    /// Where in density the line exists.
    pub domain: Domain,
}

fn r(p: i64, q: i64) -> Rational {
    Rational::new(p, q).unwrap_or(Rational::ZERO)
}

fn state(kind: StateKind, t: Rational, s: Rational, gap: GapLaw, width_flux: f64) -> SynthState {
    SynthState {
        kind,
        t,
        s,
        gap,
        interaction: !matches!(gap, GapLaw::DiracLevels { .. }),
        width_flux,
        width_fixed_n0: 0.0,
        domain: Domain::Everywhere,
    }
}

/// Main-fan integer gaps ν = ±(4N+2) for N = 0..=n_max, and the symmetry-broken integers with
/// their Coulomb prefactors and thresholds.
fn main_fan(dev: &Device, n_max: u32, broken: &[(i64, f64, f64)]) -> Vec<SynthState> {
    let mut out = Vec::new();
    for n in 0..=n_max {
        for sign in [1, -1] {
            let nu = sign * (4 * n as i64 + 2);
            out.push(state(
                StateKind::Integer,
                Rational::integer(nu),
                Rational::ZERO,
                GapLaw::DiracLevels {
                    lower_level: n,
                    velocity: dev.fermi_velocity,
                },
                1.6,
            ));
        }
    }
    for &(nu, k, b0) in broken {
        let signs: &[i64] = if nu == 0 { &[1] } else { &[1, -1] };
        for &sign in signs {
            out.push(state(
                StateKind::BrokenSymmetry,
                Rational::integer(sign * nu),
                Rational::ZERO,
                GapLaw::Coulomb { k, b0 },
                0.4,
            ));
        }
    }
    out
}

/// Composite-fermion fractions ν₀ + p/(2p±1) with ν₀ ∈ {0, 1} (and their negatives) inside
/// the N = 0 level, for CF denominators |2p±1| ∈ {3, 5}; `k3`, `k5` are the Coulomb prefactors.
fn composite_fermions(k3: f64, k5: f64, b0: f64) -> Vec<SynthState> {
    let mut out = Vec::new();
    for nu0 in [0i64, 1] {
        // (p, ±): 1/3, 2/3 (denominator 3); 2/5, 3/5 (denominator 5).
        for (p, plus) in [(1i64, true), (2, false), (2, true), (3, false)] {
            let den = if plus { 2 * p + 1 } else { 2 * p - 1 };
            let frac = r(p, den);
            let nu = Rational::integer(nu0)
                .checked_add(frac)
                .unwrap_or(Rational::ZERO);
            let k = if den == 3 { k3 } else { k5 };
            for sign in [1i64, -1] {
                let t = nu
                    .checked_mul(Rational::integer(sign))
                    .unwrap_or(Rational::ZERO);
                out.push(state(
                    StateKind::Fractional,
                    t,
                    Rational::ZERO,
                    GapLaw::Coulomb { k, b0 },
                    0.25 / den as f64,
                ));
            }
        }
    }
    out
}

/// All gapped states of a device.
pub fn states_of(dev: &Device) -> Vec<SynthState> {
    match dev.name {
        DeviceName::Wren => {
            // (ν, k in K T^−½, b₀ in T) of the symmetry-broken integers.
            let broken = [
                (0, 11.5, 0.0),
                (1, 8.1, 0.0),
                (4, 9.1, 0.0),
                (3, 6.9, 0.0),
                (5, 6.9, 0.0),
                (8, 6.4, 0.0),
                (7, 5.5, 0.0),
                (9, 5.5, 0.0),
            ];
            let mut v = main_fan(dev, 14, &broken);
            v.extend(composite_fermions(6.1, 5.1, 0.0));
            v
        }
        DeviceName::Tern => {
            let broken = [
                (0, 3.9, 0.0),
                (1, 2.5, 0.0),
                (4, 2.8, 0.0),
                (3, 1.95, 0.0),
                (5, 1.95, 0.0),
            ];
            let mut v = main_fan(dev, 20, &broken);
            // Main-fan fractions (CF denominators 3 and 5).
            v.extend(composite_fermions(2.0, 1.5, 0.5));
            for st in &mut v {
                st.domain = Domain::MainCone;
            }
            // Satellite fans from s = ±4: Landau gaps of the satellite Dirac cones.
            for s in [4i64, -4] {
                for n in 0..=2u32 {
                    for sign in [1i64, -1] {
                        let mut sat = state(
                            StateKind::Wannier,
                            Rational::integer(sign * (4 * n as i64 + 2)),
                            Rational::integer(s),
                            GapLaw::DiracLevels {
                                lower_level: n,
                                velocity: dev.satellite_velocity,
                            },
                            1.2,
                        );
                        sat.domain = Domain::SatelliteCone;
                        v.push(sat);
                    }
                }
                // The band insulators at full filling, gapped at zero field (hole side larger).
                let k = if s < 0 { 12.0 } else { 5.0 };
                let mut bi = state(
                    StateKind::Wannier,
                    Rational::ZERO,
                    Rational::integer(s),
                    GapLaw::Constant { k },
                    0.4,
                );
                bi.width_fixed_n0 = 0.06;
                v.push(bi);
            }
            // Hofstadter minigaps: integer (t, s) Wannier lines, (t, s, k in K/T, b₀ in T).
            for (t, s, k, b0) in [
                (-1, 1, 2.0, 3.0),
                (1, -1, 2.0, 3.0),
                (-2, 2, 1.5, 5.0),
                (2, -2, 1.5, 5.0),
                (3, -1, 1.2, 6.0),
                (-3, 1, 1.2, 6.0),
                (1, -3, 1.0, 7.0),
                (-1, 3, 1.0, 7.0),
            ] {
                v.push(state(
                    StateKind::Wannier,
                    Rational::integer(t),
                    Rational::integer(s),
                    GapLaw::Linear { k, b0 },
                    0.3,
                ));
            }
            // Symmetry-broken Chern states with fractional s.
            for (t, s) in [
                ((1, 1), (1, 2)),
                ((-1, 1), (-1, 2)),
                ((2, 1), (1, 3)),
                ((-2, 1), (-1, 3)),
            ] {
                v.push(state(
                    StateKind::BrokenSymmetry,
                    r(t.0, t.1),
                    r(s.0, s.1),
                    GapLaw::Linear { k: 0.8, b0: 9.0 },
                    0.15,
                ));
            }
            // Fractional Chern insulators with fractional t.
            for (t, s) in [
                ((2, 3), (1, 3)),
                ((1, 3), (2, 3)),
                ((-2, 3), (-1, 3)),
                ((-1, 3), (-2, 3)),
            ] {
                v.push(state(
                    StateKind::Fractional,
                    r(t.0, t.1),
                    r(s.0, s.1),
                    GapLaw::Linear { k: 1.2, b0: 9.0 },
                    0.08,
                ));
            }
            v
        }
    }
}

/// Denominators q of the Brown–Zak fields φ/φ₀ = 1/q the moiré device shows.
pub const BROWN_ZAK_DENOMINATORS: [i64; 5] = [2, 3, 4, 5, 6];

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn dirac_level_gap_matches_reference() {
        // check-values §4: E₁(10 T) = 114.7355 meV = 1331.45 K for v_F = 10⁶ m/s, and
        // E₂(10 T) = 162.2605 meV, so E₂ − E₁ = 47.525 meV = 551.51 K (1 meV ≙ 11.604 518 K).
        let g0 = GapLaw::DiracLevels {
            lower_level: 0,
            velocity: 1e6,
        };
        let g1 = GapLaw::DiracLevels {
            lower_level: 1,
            velocity: 1e6,
        };
        assert!((g0.gap_k(10.0) - 1331.45).abs() < 0.02);
        assert!((g1.gap_k(-10.0) - (162.2605 - 114.7355) * 11.604_518).abs() < 0.02);
        assert_eq!(GapLaw::Linear { k: 2.0, b0: 3.0 }.gap_k(2.0), 0.0);
    }

    #[test]
    fn device_state_lists_hold_the_expected_sequences() {
        let wren = states_of(&Device::of(DeviceName::Wren));
        let has = |v: &[SynthState], t: Rational, s: Rational, k: StateKind| {
            v.iter().any(|x| x.t == t && x.s == s && x.kind == k)
        };
        let z = Rational::ZERO;
        for nu in [2, -2, 6, -6, 10, -10] {
            assert!(has(&wren, Rational::integer(nu), z, StateKind::Integer));
        }
        for nu in [0, 1, -1, 3, 4, -5] {
            assert!(has(
                &wren,
                Rational::integer(nu),
                z,
                StateKind::BrokenSymmetry
            ));
        }
        for (p, q) in [(1, 3), (2, 3), (2, 5), (4, 3), (5, 3), (-1, 3)] {
            assert!(has(&wren, r(p, q), z, StateKind::Fractional));
        }
        let tern = states_of(&Device::of(DeviceName::Tern));
        assert!(has(
            &tern,
            Rational::integer(2),
            Rational::integer(4),
            StateKind::Wannier
        ));
        assert!(has(
            &tern,
            Rational::integer(-1),
            Rational::integer(1),
            StateKind::Wannier
        ));
        assert!(has(
            &tern,
            Rational::ONE,
            r(1, 2),
            StateKind::BrokenSymmetry
        ));
        assert!(has(&tern, r(1, 3), r(2, 3), StateKind::Fractional));
        // No state appears twice.
        for (i, a) in tern.iter().enumerate() {
            assert!(tern[i + 1..].iter().all(|b| (b.t, b.s) != (a.t, a.s)));
        }
    }
}

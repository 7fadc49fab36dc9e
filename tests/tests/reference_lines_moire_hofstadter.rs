//! Reference checks of filling factors, Hall plateaus, moiré geometry, the line model, line
//! families and the Hofstadter spectrum against values computed outside the project.
//!
//! "check-values §N" refers to the project's table of external check values
//! (shared/reference/check-values.md), whose entries were recomputed independently with
//! arbitrary-precision arithmetic from the exact SI 2019 constants and the published formulas;
//! each check below names the section and the formula's source as listed there.

use approx::assert_relative_eq;
use fanmark_core::families::{
    generate, jain_sequence, CompositeFermionSpec, FamilySpec, LandauSequence,
};
use fanmark_core::filling::{
    density_at_filling, field_at_filling, filling_factor, hall_conductance, hall_plateau_resistance,
};
use fanmark_core::hofstadter::{diophantine, square_lattice_bands, square_lattice_spectrum};
use fanmark_core::line::{Family, Frame, Line};
use fanmark_core::moire::{Moire, GRAPHENE_LATTICE_M};
use fanmark_core::units::{cm2_to_m2, m2_to_cm2};
use fanmark_core::Rational;
use proptest::prelude::*;

fn r(p: i64, q: i64) -> Rational {
    Rational::new(p, q).unwrap()
}

// ---------------------------------------------------------------------------------------------
// Hall plateaus and filling factors
// ---------------------------------------------------------------------------------------------

#[test]
fn hall_plateaus_match_rk_over_nu() {
    // check-values §1, "Hall plateaus, R_xy = R_K/ν" (exact SI 2019 h and e; status V).
    // (ν, R_xy in Ω, σ_xy in µS)
    let rows: [(f64, f64, f64); 11] = [
        (1.0, 25_812.807_459_3, 38.740_458_649),
        (2.0, 12_906.403_729_65, 77.480_917_299),
        (3.0, 8_604.269_153_10, 116.221_375_948),
        (4.0, 6_453.201_864_83, 154.961_834_597),
        (6.0, 4_302.134_576_55, 232.442_751_896),
        (10.0, 2_581.280_745_93, 387.404_586_493),
        (2.0 / 3.0, 38_719.211_188_96, 25.826_972_433),
        (1.0 / 3.0, 77_438.422_377_91, 12.913_486_216),
        (2.0 / 5.0, 64_532.018_648_26, 15.496_183_460),
        (0.5, 51_625.614_918_61, 19.370_229_325),
        (2.5, 10_325.122_983_72, 96.851_146_623),
    ];
    for (nu, rxy, sxy_us) in rows {
        assert_relative_eq!(hall_plateau_resistance(nu), rxy, max_relative = 1e-11);
        assert_relative_eq!(hall_conductance(nu) * 1e6, sxy_us, max_relative = 1e-10);
    }
}

#[test]
fn filling_factor_table() {
    // check-values §2, "Filling factor ν = n h/(e B)" (status V). n in cm⁻², B in T.
    let rows: [(f64, f64, f64); 7] = [
        (1e12, 1.0, 41.356_676_97),
        (1e12, 10.0, 4.135_667_697),
        (1e12, 4.135_667_696_9, 10.000_000_0),
        (2.417_989_242_08e11, 10.0, 1.0),
        (3e12, 14.0, 8.862_145_065),
        (-2e12, 9.0, -9.190_372_66),
        (1e11, 0.5, 8.271_335_394),
    ];
    for (n, b, nu) in rows {
        assert_relative_eq!(filling_factor(cm2_to_m2(n), b), nu, max_relative = 1e-9);
    }
    // check-values §2 "Other checks": n = 1e12 cm⁻² sits at ν = 2 at B = 20.678 338 48 T, and
    // one four-fold LL at 1 T holds 9.671 957e10 cm⁻².
    assert_relative_eq!(
        field_at_filling(cm2_to_m2(1e12), 2.0),
        20.678_338_48,
        max_relative = 1e-9
    );
    assert_relative_eq!(
        m2_to_cm2(density_at_filling(4.0, 1.0)),
        9.671_957e10,
        max_relative = 1e-6
    );
    assert!(filling_factor(1e16, 0.0).is_nan());
}

#[test]
fn streda_slopes() {
    // check-values §6, Středa formula: a gap of Chern number t has dn/dB = t e/h (status V).
    let rows = [
        (1, 2.417_989e10),
        (2, 4.835_978e10),
        (4, 9.671_957e10),
        (6, 1.450_794e11),
        (10, 2.417_989e11),
    ];
    for (t, slope_cm2_per_t) in rows {
        let l = Line::gap(Family::Integer, "check", r(t, 1), Rational::ZERO);
        let dn = l.density_at(1.0, None).unwrap() - l.density_at(0.0, None).unwrap();
        assert_relative_eq!(m2_to_cm2(dn), slope_cm2_per_t, max_relative = 1e-6);
    }
}

// ---------------------------------------------------------------------------------------------
// Moiré geometry
// ---------------------------------------------------------------------------------------------

#[test]
fn twisted_bilayer_table() {
    // check-values §5, "Twisted bilayer graphene (a = 0.246 nm)", λ = a/(2 sin(θ/2)),
    // A = (√3/2)λ², n_s = 4/A, B₁ = φ₀/A (formula: Lopes dos Santos et al. 2007; Bistritzer &
    // MacDonald 2011; status V). (θ°, λ nm, A nm², n_s cm⁻², φ₀/A T, B at φ/φ₀ = 1/2, 1/3, 1/4)
    let rows: [(f64, f64, f64, f64, f64, [f64; 3]); 7] = [
        (
            0.80,
            17.6186,
            268.827,
            1.487_94e12,
            15.384,
            [7.692, 5.128, 3.846],
        ),
        (
            1.00,
            14.0949,
            172.051,
            2.324_89e12,
            24.038,
            [12.019, 8.012, 6.009],
        ),
        (
            1.05,
            13.4238,
            156.056,
            2.563_19e12,
            26.501,
            [13.251, 8.834, 6.625],
        ),
        (
            1.08,
            13.0509,
            147.507,
            2.711_74e12,
            28.037,
            [14.019, 9.346, 7.009],
        ),
        (
            1.10,
            12.8136,
            142.192,
            2.813_10e12,
            29.085,
            [14.543, 9.695, 7.271],
        ),
        (
            1.20,
            11.7458,
            119.481,
            3.347_81e12,
            34.614,
            [17.307, 11.538, 8.653],
        ),
        (
            1.30,
            10.8424,
            101.807,
            3.929_00e12,
            40.623,
            [20.311, 13.541, 10.156],
        ),
    ];
    for (th, lam, area, ns, b1, bz) in rows {
        let m = Moire::twisted_bilayer(th, GRAPHENE_LATTICE_M).unwrap();
        assert_relative_eq!(m.lambda_m * 1e9, lam, max_relative = 1e-5);
        assert_relative_eq!(m.area_m2() * 1e18, area, max_relative = 1e-5);
        assert_relative_eq!(m2_to_cm2(m.full_filling_m2()), ns, max_relative = 1e-5);
        assert_relative_eq!(m.one_flux_field_t(), b1, max_relative = 5e-5);
        for (q, b) in [2, 3, 4].into_iter().zip(bz) {
            assert_relative_eq!(m.brown_zak_field_t(r(1, q)), b, max_relative = 1e-4);
        }
    }
    // check-values §5: at 1.10°, n₀ = 1/A = 7.032 76e11 cm⁻².
    let m = Moire::twisted_bilayer(1.10, GRAPHENE_LATTICE_M).unwrap();
    assert_relative_eq!(m2_to_cm2(m.n0_m2()), 7.032_76e11, max_relative = 1e-5);
}

#[test]
fn twist_from_full_filling_density() {
    // check-values §5, inverse θ = 2 arcsin(a/2λ), λ = √(8/(√3 n_s)) (status V).
    let rows = [
        (2.50e12, 1.0370),
        (2.58e12, 1.0534),
        (2.70e12, 1.0777),
        (2.82e12, 1.1013),
        (3.00e12, 1.1360),
    ];
    for (ns, th) in rows {
        let m = Moire::from_full_filling(cm2_to_m2(ns)).unwrap();
        let got = m.twisted_bilayer_twist_deg(GRAPHENE_LATTICE_M).unwrap();
        assert!((got - th).abs() < 6e-5, "n_s {ns}: θ {got} vs {th}");
    }
}

#[test]
fn graphene_on_hbn_table() {
    // check-values §5, "Graphene on hBN", λ = (1+δ)a/√(2(1+δ)(1−cos θ)+δ²) (formula:
    // Yankowitz et al. 2012, from memory per check-values; numbers status V).
    // (δ, θ°, λ nm, A nm², n_s cm⁻², φ₀/A T)
    let rows: [(f64, f64, f64, f64, f64, f64); 6] = [
        (0.018, 0.0, 13.9127, 167.630, 2.386_21e12, 24.671),
        (0.0179, 0.0, 13.9890, 169.475, 2.360_23e12, 24.403),
        (0.017, 0.0, 14.7166, 187.562, 2.132_63e12, 22.050),
        (0.018, 0.5, 12.4976, 135.265, 2.957_17e12, 30.575),
        (0.018, 1.0, 9.9450, 85.653, 4.669_99e12, 48.284),
        (0.018, 2.0, 6.3318, 34.720, 1.152_07e13, 119.114),
    ];
    for (d, th, lam, area, ns, b1) in rows {
        let m = Moire::graphene_hbn(th, GRAPHENE_LATTICE_M, d).unwrap();
        assert_relative_eq!(m.lambda_m * 1e9, lam, max_relative = 1e-5);
        assert_relative_eq!(m.area_m2() * 1e18, area, max_relative = 1e-5);
        assert_relative_eq!(m2_to_cm2(m.full_filling_m2()), ns, max_relative = 1e-5);
        assert_relative_eq!(m.one_flux_field_t(), b1, max_relative = 5e-5);
        // Inverse: the twist from λ at the same δ.
        let back = m.graphene_hbn_twist_deg(GRAPHENE_LATTICE_M, d).unwrap();
        assert!((back - th).abs() < 1e-6, "{back} vs {th}");
    }
}

#[test]
fn graphene_on_hbn_brown_zak_fields() {
    // check-values §5, "Brown–Zak fields for aligned G/hBN (δ = 1.8%)" (status V; Brown–Zak
    // states: Krishna Kumar et al., Science 357, 181 (2017), B).
    let m = Moire::graphene_hbn(0.0, GRAPHENE_LATTICE_M, 0.018).unwrap();
    let rows = [
        ((1, 1), 24.671),
        ((1, 2), 12.336),
        ((1, 3), 8.224),
        ((2, 3), 16.448),
        ((1, 4), 6.168),
        ((3, 4), 18.504),
        ((1, 5), 4.934),
        ((2, 5), 9.869),
    ];
    for ((p, q), b) in rows {
        let got = m.brown_zak_field_t(r(p, q));
        assert!((got - b).abs() < 6e-4, "{p}/{q}: {got} vs {b}");
        // Inverse: λ back from a Brown–Zak field at known p/q.
        let back = Moire::from_brown_zak_field(got, r(p, q)).unwrap();
        assert_relative_eq!(back.lambda_m * 1e9, 13.9127, max_relative = 1e-5);
    }
    // check-values §5: λ_max = (1+δ)a/δ = 13.9996 nm for a_hBN/a_G = 2.504/2.46.
    let delta = 2.504 / 2.46 - 1.0;
    let lmax = fanmark_core::moire::hbn_max_wavelength(GRAPHENE_LATTICE_M, delta).unwrap();
    assert_relative_eq!(lmax * 1e9, 13.9996, max_relative = 1e-5);
}

#[test]
fn cell_from_measured_wavelength() {
    // check-values §5, "For a given measured λ" (status V). (λ nm, A nm², n_s cm⁻², φ₀/A T)
    let rows = [
        (15.5, 208.06, 1.9225e12, 19.877),
        (14.0, 169.74, 2.3565e12, 24.365),
        (13.9, 167.32, 2.3906e12, 24.716),
        (11.6, 116.53, 3.4325e12, 35.489),
    ];
    for (lam, area, ns, b1) in rows {
        let m = Moire::new(lam * 1e-9).unwrap();
        assert_relative_eq!(m.area_m2() * 1e18, area, max_relative = 5e-5);
        assert_relative_eq!(m2_to_cm2(m.full_filling_m2()), ns, max_relative = 5e-5);
        assert_relative_eq!(m.one_flux_field_t(), b1, max_relative = 5e-5);
    }
    // λ = 15.5 nm exceeds the δ = 1.8 % maximum: no twist reaches it (check-values §5 note).
    assert!(Moire::new(15.5e-9)
        .unwrap()
        .graphene_hbn_twist_deg(GRAPHENE_LATTICE_M, 0.018)
        .is_err());
}

// ---------------------------------------------------------------------------------------------
// Wannier-line densities
// ---------------------------------------------------------------------------------------------

/// e/h in cm⁻² T⁻¹ from the exact SI 2019 constants (check-values §1).
const E_OVER_H_CM2: f64 = 2.417_989_242e10;

#[test]
fn wannier_line_densities_hbn_at_10_tesla() {
    // check-values §6, "Fan-line arithmetic fixtures": G/hBN δ = 1.8 %, θ = 0,
    // n₀ = 5.965 524e11 cm⁻², φ₀/A = 24.671 43 T, at B = 10 T φ/φ₀ = 0.405 327 (status V).
    let m = Moire::graphene_hbn(0.0, GRAPHENE_LATTICE_M, 0.018).unwrap();
    let n0 = m.n0_m2();
    assert_relative_eq!(m2_to_cm2(n0), 5.965_524e11, max_relative = 1e-6);
    assert_relative_eq!(m.flux_ratio(10.0), 0.405_327, max_relative = 1e-5);
    // ((t, s), n/n₀, n cm⁻²)
    let rows = [
        ((r(2, 1), r(0, 1)), 0.810_654, 4.835_978e11),
        ((r(6, 1), r(0, 1)), 2.431_963, 1.450_794e12),
        ((r(-4, 1), r(4, 1)), 2.378_691, 1.419_014e12),
        ((r(2, 1), r(4, 1)), 4.810_654, 2.869_808e12),
        ((r(1, 1), r(1, 1)), 1.405_327, 8.383_513e11),
        ((r(3, 1), r(-1, 1)), 0.215_982, 1.288_444e11),
        ((r(2, 3), r(1, 3)), 0.603_551, 3.600_501e11),
        ((r(1, 3), r(2, 3)), 0.801_776, 4.783_013e11),
    ];
    let wannier = Frame::wannier(n0).unwrap();
    for ((t, s), nn0, n_cm2) in rows {
        let line = Line::gap(Family::Wannier, "check", t, s);
        let n = line.density_at(10.0, Some(n0)).unwrap();
        assert_relative_eq!(m2_to_cm2(n), n_cm2, max_relative = 2e-6);
        // The same from n = t (e/h) B + s n₀ with e/h = 2.417 989 242e10 cm⁻² T⁻¹ and the table's
        // n₀ (check-values §1 and §6).
        let derived = t.to_f64() * E_OVER_H_CM2 * 10.0 + s.to_f64() * 5.965_524e11;
        assert_relative_eq!(m2_to_cm2(n), derived, max_relative = 1e-6);
        let p = wannier.evaluate(&line, 10.0).unwrap();
        assert_relative_eq!(p.x, nn0, max_relative = 2e-6);
        assert_relative_eq!(p.y, 0.405_327, max_relative = 1e-5);
    }
    // check-values §6: (1, 0) and (−1, 1) cross at φ/φ₀ = ½, n/n₀ = ½.
    let a = Line::gap(Family::Wannier, "check", r(1, 1), r(0, 1));
    let b = Line::gap(Family::Wannier, "check", r(-1, 1), r(1, 1));
    let bh = m.brown_zak_field_t(r(1, 2));
    let (pa, pb) = (
        wannier.evaluate(&a, bh).unwrap(),
        wannier.evaluate(&b, bh).unwrap(),
    );
    assert_relative_eq!(pa.x, 0.5, max_relative = 1e-12);
    assert_relative_eq!(pb.x, 0.5, max_relative = 1e-12);
}

#[test]
fn wannier_line_densities_tbg_at_8_tesla() {
    // check-values §6, "TBG at 1.10°, B = 8 T (φ/φ₀ = 0.275 054)" (status V).
    let m = Moire::twisted_bilayer(1.10, GRAPHENE_LATTICE_M).unwrap();
    assert_relative_eq!(m.flux_ratio(8.0), 0.275_054, max_relative = 1e-5);
    let rows = [
        ((4, 0), 7.737_566e11),
        ((2, 2), 1.793_431e12),
        ((-2, -2), -1.793_431e12),
        ((1, 3), 2.303_268e12),
        ((3, 1), 1.283_594e12),
    ];
    for ((t, s), n_cm2) in rows {
        let line = Line::gap(Family::Wannier, "check", r(t, 1), r(s, 1));
        let n = line.density_at(8.0, Some(m.n0_m2())).unwrap();
        assert_relative_eq!(m2_to_cm2(n), n_cm2, max_relative = 2e-6);
    }
}

// ---------------------------------------------------------------------------------------------
// Families
// ---------------------------------------------------------------------------------------------

#[test]
fn integer_sequences() {
    // check-values §2 "Other checks": monolayer ±4(N+½) = ±2, ±6, ±10, ±14, ±18; bilayer ±4N =
    // ±4, ±8, ±12 (no ν = 0 without symmetry breaking).
    let mono = LandauSequence::monolayer().fillings(r(18, 1)).unwrap();
    let want: Vec<Rational> = [-18, -14, -10, -6, -2, 2, 6, 10, 14, 18]
        .map(Rational::integer)
        .to_vec();
    assert_eq!(mono, want);
    let bi = LandauSequence::bilayer().fillings(r(12, 1)).unwrap();
    let want: Vec<Rational> = [-12, -8, -4, 4, 8, 12].map(Rational::integer).to_vec();
    assert_eq!(bi, want);
}

#[test]
fn jain_sequences() {
    // check-values §8, Jain sequences (Jain, PRL 63, 199 (1989), M; generated lists V).
    let fr = |v: &[(i64, i64)]| v.iter().map(|&(p, q)| r(p, q)).collect::<Vec<_>>();
    assert_eq!(
        jain_sequence(2, 1, 7).unwrap(),
        fr(&[(1, 3), (2, 5), (3, 7), (4, 9), (5, 11), (6, 13), (7, 15)])
    );
    assert_eq!(
        jain_sequence(2, -1, 7).unwrap(),
        fr(&[(1, 1), (2, 3), (3, 5), (4, 7), (5, 9), (6, 11), (7, 13)])
    );
    assert_eq!(
        jain_sequence(4, 1, 5).unwrap(),
        fr(&[(1, 5), (2, 9), (3, 13), (4, 17), (5, 21)])
    );
    assert_eq!(
        jain_sequence(4, -1, 5).unwrap(),
        fr(&[(1, 3), (2, 7), (3, 11), (4, 15), (5, 19)])
    );
}

fn cf_lines(nu0_min: i64, nu0_max: i64, p_max: i64, four: bool) -> Vec<Line> {
    let spec = FamilySpec {
        integer: None,
        composite_fermion: Some(CompositeFermionSpec {
            nu0_min,
            nu0_max,
            p_max,
            two_flux: true,
            four_flux: four,
        }),
        ..FamilySpec::integers(LandauSequence::monolayer(), 0)
    };
    generate(&spec, None).unwrap()
}

#[test]
fn one_third_is_one_line_with_two_memberships() {
    // check-values §8: 1/3 is in p/(2p+1) and in p/(4p−1) at p = 1; keep one line.
    let lines = cf_lines(0, 0, 5, true);
    let thirds: Vec<&Line> = lines
        .iter()
        .filter(|l| l.ts() == Some((r(1, 3), Rational::ZERO)))
        .collect();
    assert_eq!(thirds.len(), 1);
    let seqs: Vec<&str> = thirds[0]
        .memberships
        .iter()
        .map(|m| m.sequence.as_str())
        .collect();
    assert_eq!(seqs.len(), 2, "{seqs:?}");
    assert!(seqs.iter().any(|s| s.contains("2p+1")));
    assert!(seqs.iter().any(|s| s.contains("4p-1")));
    assert_eq!(thirds[0].label, "ν = 1/3");
}

#[test]
fn graphene_zero_level_composite_fermions() {
    // check-values §8, "Graphene N = 0 LL": ν₀ = 1 gives 4/3, 7/5, 10/7, 13/9 and 5/3, 8/5,
    // 11/7, 14/9; ν₀ = −2 gives −5/3, −8/5, … and −4/3, −7/5, … (status V).
    let lines = cf_lines(-2, 1, 5, false);
    let has = |p: i64, q: i64| {
        lines
            .iter()
            .any(|l| l.ts() == Some((r(p, q), Rational::ZERO)))
    };
    for (p, q) in [
        (4, 3),
        (7, 5),
        (10, 7),
        (13, 9),
        (5, 3),
        (8, 5),
        (11, 7),
        (14, 9),
        (-5, 3),
        (-8, 5),
        (-4, 3),
        (-7, 5),
    ] {
        assert!(has(p, q), "{p}/{q} missing");
    }
    // Integers (p/(2p−1) at p = 1) are not composite-fermion lines.
    assert!(lines.iter().all(|l| !l.ts().unwrap().0.is_integer()));
    // No duplicates.
    let mut ts: Vec<Rational> = lines.iter().map(|l| l.ts().unwrap().0).collect();
    let n = ts.len();
    ts.sort();
    ts.dedup();
    assert_eq!(ts.len(), n);
}

// ---------------------------------------------------------------------------------------------
// Hofstadter
// ---------------------------------------------------------------------------------------------

fn assert_bands(flux: Rational, want: &[(f64, f64)]) {
    let bands = square_lattice_bands(flux).unwrap();
    for (i, &(lo, hi)) in want.iter().enumerate() {
        assert!(
            (bands[i].e_min - lo).abs() < 2e-9 && (bands[i].e_max - hi).abs() < 2e-9,
            "flux {flux} band {i}: [{}, {}] vs [{lo}, {hi}]",
            bands[i].e_min,
            bands[i].e_max
        );
        // The spectrum is symmetric in E.
        let m = bands[bands.len() - 1 - i];
        assert!((m.e_min + hi).abs() < 2e-9 && (m.e_max + lo).abs() < 2e-9);
    }
}

#[test]
fn square_lattice_band_edges() {
    // check-values §7, square lattice, t = 1, q×q Harper matrix (Harper 1955, Hofstadter 1976,
    // M for the citations; numbers status V).
    let s2 = 2f64.sqrt();
    let s3 = 3f64.sqrt();
    assert_bands(r(1, 2), &[(-2.0 * s2, 0.0)]);
    assert_bands(r(1, 3), &[(-(1.0 + s3), -2.0), (-(s3 - 1.0), s3 - 1.0)]);
    assert_bands(
        r(1, 4),
        &[
            (-2.828_427_124_7, -2.613_125_929_8),
            (-1.082_392_200_3, 0.0),
        ],
    );
    assert_bands(
        r(1, 5),
        &[
            (-2.966_447_989_1, -2.902_113_032_6),
            (-1.348_414_000_4, -0.902_113_032_6),
            (-0.381_966_011_3, 0.381_966_011_3),
        ],
    );
    assert_bands(
        r(2, 5),
        &[
            (-2.618_033_988_7, -2.332_749_067_3),
            (-2.175_570_504_6, -1.714_715_078_5),
            (-0.175_570_504_6, 0.175_570_504_6),
        ],
    );
    // Entries given to 9–10 digits in the table.
    let b6 = square_lattice_bands(r(1, 6)).unwrap();
    let want6 = [
        (-3.095_573_564_8, -3.076_378_002_6),
        (-1.592_450_434, -std::f64::consts::SQRT_2), // table: −1.414 213 5624 = −√2
        (-0.646_083_822, 0.0),
    ];
    for (b, (lo, hi)) in b6.iter().zip(want6) {
        assert!((b.e_min - lo).abs() < 1e-8 && (b.e_max - hi).abs() < 1e-8);
    }
    assert_bands(
        r(3, 7),
        &[
            (-2.610_973_927_2, -2.532_568_597_2),
            (-2.246_979_603_7, -1.968_905_632_3),
            (-1.827_993_678_9, -1.581_014_075_2),
            (-0.047_310_962_3, 0.047_310_962_3),
        ],
    );
    // check-values §7: α = 0 gives the single band [−4, 4].
    assert_bands(r(1, 1), &[(-4.0, 4.0)]);
}

#[test]
fn gap_chern_numbers() {
    // check-values §7, "Gap Chern numbers t_r from the Diophantine equation" r = t p + s q,
    // |t| ≤ q/2 (TKNN 1982 and Dana, Avron & Zak 1985, M; rows status V). Our sign is the
    // Středa slope of the line model; check-values notes one Berry-curvature orientation gives −t.
    // ((p, q), [(r, t_r, s_r), …])
    type GapRows<'a> = &'a [(i64, i64, i64)];
    let cases: [((i64, i64), GapRows); 5] = [
        ((1, 3), &[(1, 1, 0), (2, -1, 1)]),
        ((2, 5), &[(1, -2, 1), (2, 1, 0), (3, -1, 1), (4, 2, 0)]),
        ((1, 4), &[(1, 1, 0), (3, -1, 1)]),
        ((1, 5), &[(1, 1, 0), (2, 2, 0), (3, -2, 1), (4, -1, 1)]),
        (
            (3, 7),
            &[
                (1, -2, 1),
                (2, 3, -1),
                (3, 1, 0),
                (4, -1, 1),
                (5, -3, 2),
                (6, 2, 0),
            ],
        ),
    ];
    for ((p, q), rows) in cases {
        let sp = square_lattice_spectrum(r(p, q)).unwrap();
        assert_eq!(sp.gaps.len(), rows.len(), "open gaps at {p}/{q}");
        for (&(rr, t, s), g) in rows.iter().zip(&sp.gaps) {
            assert_eq!((g.r, g.t, g.s), (rr, t, s), "flux {p}/{q}");
            assert_eq!(diophantine(rr, p, q).unwrap(), (t, s));
            // check-values §7 consistency: n/n₀ = r/q = t α + s.
            assert_eq!(
                r(t, 1)
                    .checked_mul(r(p, q))
                    .unwrap()
                    .checked_add(r(s, 1))
                    .unwrap(),
                r(rr, q)
            );
            assert!(g.width() > 0.0);
        }
    }
    // check-values §7: band Chern numbers (1, −2, 1) at 1/3 and (−2, 3, −2, 3, −2) at 2/5 are
    // the differences of neighbouring gap Chern numbers (t₀ = t_q = 0).
    for ((p, q), bands) in [((1, 3), vec![1, -2, 1]), ((2, 5), vec![-2, 3, -2, 3, -2])] {
        let sp = square_lattice_spectrum(r(p, q)).unwrap();
        let mut ts = vec![0];
        ts.extend(sp.gaps.iter().map(|g| g.t));
        ts.push(0);
        let got: Vec<i64> = ts.windows(2).map(|w| w[1] - w[0]).collect();
        assert_eq!(got, bands);
    }
}

// ---------------------------------------------------------------------------------------------
// Properties
// ---------------------------------------------------------------------------------------------

proptest! {
    #[test]
    fn rationals_reduce_and_order(a in -500i64..500, b in 1i64..500, c in -500i64..500, d in 1i64..500, k in 1i64..50) {
        let x = Rational::new(a, b).unwrap();
        // Reduced, positive denominator, scale-invariant.
        prop_assert!(x.denom() > 0);
        prop_assert_eq!(Rational::new(a * k, b * k).unwrap(), x);
        prop_assert_eq!(Rational::new(-a, -b).unwrap(), x);
        let g = {
            let (mut u, mut v) = (x.numer().abs(), x.denom());
            while v != 0 { let t = u % v; u = v; v = t; }
            u
        };
        prop_assert!(g == 1 || x.numer() == 0);
        // Order agrees with cross-multiplication of the unreduced integers.
        let y = Rational::new(c, d).unwrap();
        prop_assert_eq!(x.cmp(&y), (a * d).cmp(&(c * b)));
        // Text round trip.
        prop_assert_eq!(x.to_string().parse::<Rational>().unwrap(), x);
    }

    #[test]
    fn any_frame_round_trip(tp in -20i64..=20, tq in 1i64..=7, sp in -9i64..=9, sq in 1i64..=7,
                            b in 0.01f64..45.0, neg in any::<bool>(), theta in 0.6f64..3.0,
                            alpha in 1e10f64..1e12, vcnp in -5.0f64..5.0, which in 0usize..4) {
        let m = Moire::twisted_bilayer(theta, GRAPHENE_LATTICE_M).unwrap();
        let n0 = m.n0_m2();
        let gate = fanmark_core::gate::SingleGate { alpha_m2_per_v: cm2_to_m2(alpha), v_cnp: vcnp };
        let frame = match which {
            0 => Frame::gate_field(gate, Some(n0)).unwrap(),
            1 => Frame::density_field(Some(n0)).unwrap(),
            2 => Frame::filling_field(Some(n0)).unwrap(),
            _ => Frame::wannier(n0).unwrap(),
        };
        let line = Line::gap(Family::Wannier, "prop", r(tp, tq), r(sp, sq));
        let b = if neg { -b } else { b };
        let p = frame.evaluate(&line, b).unwrap();
        let (n, bb) = frame.from_frame(p).unwrap();
        let want = line.density_at(b, Some(n0)).unwrap();
        prop_assert!((bb - b).abs() <= 1e-12 * b.abs());
        prop_assert!((n - want).abs() <= 1e-9 * want.abs().max(n0));
    }
}

//! Reference checks of the gate models, the conductivity tensor and the Savitzky–Golay filters
//! against external values. The source of every value is named beside its check; "check-values"
//! is the project's table of independently recomputed reference values
//! (shared/reference/check-values.md), whose section is given.

use fanmark_core::conductivity::{rho_from_sigma, siemens_to_e2h, sigma_from_rho, SampleGeometry};
use fanmark_core::constants::{E_OVER_H, VON_KLITZING_R_K};
use fanmark_core::gate::{
    effective_lever_arm, graphene_quantum_capacitance, quantum_capacitance_correction, Dielectric,
    DualGate, SingleGate, GRAPHENE_FERMI_VELOCITY_M_PER_S,
};
use fanmark_core::savgol::{coefficients, savgol_1d, SavgolSpec};
use fanmark_core::units::{cm2_to_m2, m2_to_cm2, v_per_m_to_v_per_nm};
use proptest::prelude::*;

fn rel(a: f64, b: f64) -> f64 {
    ((a - b) / b).abs()
}

fn dielectric(nm: f64, eps: f64) -> Dielectric {
    Dielectric {
        thickness_m: nm * 1e-9,
        epsilon_r: eps,
    }
}

// ---------------------------------------------------------------- gate capacitance

#[test]
fn oxide_lever_arms() {
    // check-values §3 (V, computed from C = ε₀ε_r/d): n per volt in cm⁻² V⁻¹ and C in nF/cm².
    let rows = [
        (300.0, 3.9, 11.5104, 7.184_25e10),
        (285.0, 3.9, 12.1163, 7.562_37e10),
        (90.0, 3.9, 38.3681, 2.394_75e11),
    ];
    for (nm, eps, c_nf_cm2, per_volt) in rows {
        let d = dielectric(nm, eps);
        let c = d.capacitance().unwrap();
        // 1 F/m² = 10⁵ nF/cm².
        assert!(rel(c * 1e5, c_nf_cm2) < 1e-5, "{nm} nm: {}", c * 1e5);
        let g = SingleGate::from_geometry(&d, 0.0).unwrap();
        assert!(rel(m2_to_cm2(g.alpha_m2_per_v), per_volt) < 1e-5, "{nm} nm");
    }
    // The commonly quoted 7.2×10¹⁰ cm⁻² V⁻¹ for 300 nm SiO₂ (Novoselov et al., Science 306,
    // 666 (2004); from memory, check-values §3 status M), to 0.5 % as check-values advises.
    let g = SingleGate::from_geometry(&dielectric(300.0, 3.9), 0.0).unwrap();
    assert!(rel(m2_to_cm2(g.alpha_m2_per_v), 7.2e10) < 5e-3);
}

#[test]
fn hbn_lever_arms() {
    // check-values §3 (V): hBN rows, C in nF/cm² and n per volt in cm⁻² V⁻¹.
    let rows = [
        (3.0, 30.0, 88.542, 5.526_35e11),
        (3.4, 30.0, 100.348, 6.263_20e11),
        (3.76, 30.0, 110.973, 6.926_36e11),
        (4.0, 30.0, 118.056, 7.368_47e11),
        (3.0, 20.0, 132.813, 8.289_52e11),
    ];
    for (eps, nm, c_nf_cm2, per_volt) in rows {
        let d = dielectric(nm, eps);
        assert!(rel(d.capacitance().unwrap() * 1e5, c_nf_cm2) < 1e-5);
        assert!(rel(m2_to_cm2(d.lever_arm().unwrap()), per_volt) < 1e-5);
    }
}

#[test]
fn graphene_quantum_capacitance_values() {
    // check-values §3 (V): C_Q = 0.869 µF/cm² at 10¹¹ cm⁻² and 2.75 µF/cm² at 10¹² cm⁻²
    // (v_F = 10⁶ m/s); 1 F/m² = 100 µF/cm².
    let v = GRAPHENE_FERMI_VELOCITY_M_PER_S;
    let cq11 = graphene_quantum_capacitance(cm2_to_m2(1e11), v) * 100.0;
    let cq12 = graphene_quantum_capacitance(cm2_to_m2(1e12), v) * 100.0;
    assert!((cq11 - 0.869).abs() < 5e-4, "{cq11}");
    assert!((cq12 - 2.75).abs() < 5e-3, "{cq12}");
    // Series correction for 30 nm hBN, ε_r 3.4: 10.4 % at 10¹¹, 3.5 % at 10¹² (check-values §3).
    let cg = dielectric(30.0, 3.4).capacitance().unwrap();
    let c11 = quantum_capacitance_correction(cg, cm2_to_m2(1e11), v);
    let c12 = quantum_capacitance_correction(cg, cm2_to_m2(1e12), v);
    assert!((c11 - 0.104).abs() < 5e-4, "{c11}");
    assert!((c12 - 0.035).abs() < 5e-4, "{c12}");
    // "For 300 nm SiO₂ it is under 2 %" (check-values §3), at 10¹¹ cm⁻².
    let cg_ox = dielectric(300.0, 3.9).capacitance().unwrap();
    assert!(quantum_capacitance_correction(cg_ox, cm2_to_m2(1e11), v) < 0.02);
    // The effective lever arm is the geometric one reduced by that fraction.
    let eff = effective_lever_arm(cg, cm2_to_m2(1e11), v);
    let geo = dielectric(30.0, 3.4).lever_arm().unwrap();
    assert!(rel(eff, geo * (1.0 - c11)) < 1e-12);
}

#[test]
fn dual_gate_example() {
    // check-values §3 (V): top 30 nm hBN (ε 3.4, C_t = 1.003 475×10⁻³ F/m²), bottom 285 nm
    // SiO₂ (ε 3.9, C_b = 1.211 626×10⁻⁴ F/m²), V_t = 1 V, V_b = 10 V:
    // n = 1.382 557×10¹² cm⁻², D/ε₀ = −0.011 754 V/nm with D/ε₀ = (C_t V_t − C_b V_b)/(2ε₀).
    let g = DualGate::from_dielectrics(&dielectric(30.0, 3.4), &dielectric(285.0, 3.9)).unwrap();
    assert!(rel(g.c_top_f_per_m2, 1.003_475e-3) < 1e-6);
    assert!(rel(g.c_bottom_f_per_m2, 1.211_626e-4) < 1e-6);
    let (n, d) = g.density_displacement(1.0, 10.0);
    assert!(rel(m2_to_cm2(n), 1.382_557e12) < 1e-6, "{}", m2_to_cm2(n));
    assert!((v_per_m_to_v_per_nm(d) + 0.011_754).abs() < 5e-7, "{}", d);
    let (vt, vb) = g.gates_for(n, d);
    assert!((vt - 1.0).abs() < 1e-12 && (vb - 10.0).abs() < 1e-11);
}

#[test]
fn lever_arm_fixture() {
    // check-values §3 lever-arm fit fixture (V): α = 7.184 254×10¹⁰ cm⁻² V⁻¹, V_CNP = 1.5 V,
    // states (ν, B) sit at V_g = V_CNP + ν(e/h)B/α.
    let g = SingleGate {
        alpha_m2_per_v: cm2_to_m2(7.184_254e10),
        v_cnp: 1.5,
    };
    let rows = [
        (2.0, 9.0, 7.558_222),
        (6.0, 9.0, 19.674_666),
        (10.0, 9.0, 31.791_111),
        (-2.0, 9.0, -4.558_222),
        (-6.0, 9.0, -16.674_666),
        (2.0, 4.0, 4.192_543),
        (6.0, 4.0, 9.577_629),
        (-10.0, 6.0, -18.694_074),
    ];
    for (nu, b, vg) in rows {
        let n = nu * E_OVER_H * b;
        let got = g.gate_for_density(n);
        assert!((got - vg).abs() < 2e-6, "ν = {nu}, B = {b}: {got} vs {vg}");
        assert!(rel(g.density(vg), n) < 1e-6);
    }
}

// ---------------------------------------------------------------- conductivity tensor

#[test]
fn tensor_inversion_rows() {
    // check-values §12 (V, closed form checked against numpy.linalg.inv), σ_xy = −ρ_xy/(ρ_xx²+ρ_xy²):
    // (ρ_xx, ρ_xy) in Ω → (σ_xx, σ_xy) in S and in e²/h.
    let rk = VON_KLITZING_R_K;
    let rows = [
        (
            1000.0,
            5000.0,
            3.846_153_846e-5,
            -1.923_076_923e-4,
            0.992_800,
            -4.964_001,
        ),
        (0.0, rk / 2.0, 0.0, -7.748_091_730e-5, 0.0, -2.0),
        (
            200.0,
            rk / 6.0,
            1.078_262_334e-5,
            -2.319_414_834e-4,
            0.278_330,
            -5.987_061,
        ),
        (rk, rk, 1.937_022_933e-5, -1.937_022_933e-5, 0.5, -0.5),
    ];
    for (rxx, rxy, sxx, sxy, sxx_q, sxy_q) in rows {
        let (a, b) = sigma_from_rho(rxx, rxy);
        let close = |x: f64, y: f64, tol: f64| (x - y).abs() <= tol * y.abs().max(1e-30);
        assert!(
            close(a, sxx, 1e-9) || (sxx == 0.0 && a == 0.0),
            "{a} vs {sxx}"
        );
        assert!(close(b, sxy, 1e-9), "{b} vs {sxy}");
        assert!((siemens_to_e2h(a) - sxx_q).abs() < 1e-6);
        assert!((siemens_to_e2h(b) - sxy_q).abs() < 1e-6);
    }
    // Geometry: R_xx = 1500 Ω, W = 2 µm, L = 6 µm is 500 Ω/□ (check-values §12).
    let g = SampleGeometry::WidthLength {
        width_m: 2e-6,
        length_m: 6e-6,
    };
    assert!((g.rho_xx(1500.0).unwrap() - 500.0).abs() < 1e-9);
}

proptest! {
    #[test]
    fn tensor_round_trip(sxx in 1e-8f64..1e-2, sxy in -1e-2f64..1e-2) {
        // σ → ρ → σ is the identity (exact 2×2 inverse of an isotropic tensor).
        let (rxx, rxy) = rho_from_sigma(sxx, sxy);
        let (a, b) = sigma_from_rho(rxx, rxy);
        let scale = sxx.abs().max(sxy.abs());
        prop_assert!((a - sxx).abs() <= 1e-12 * scale);
        prop_assert!((b - sxy).abs() <= 1e-12 * scale);
    }
}

// ---------------------------------------------------------------- Savitzky–Golay

/// Compare computed coefficients with a table row of integers over a norm.
fn check_row(window: usize, orders: &[usize], deriv: usize, ints: &[f64], norm: f64) {
    for &order in orders {
        let c = coefficients(SavgolSpec::new(window, order, deriv).unwrap()).unwrap();
        assert_eq!(c.len(), ints.len());
        for (i, (got, want)) in c.iter().zip(ints).enumerate() {
            assert!(
                (got * norm - want).abs() < 1e-9,
                "window {window}, order {order}, deriv {deriv}, entry {i}: {} vs {want}",
                got * norm
            );
        }
    }
}

#[test]
fn savgol_coefficient_tables() {
    // check-values §9: exact rationals, order i = −m … +m (scipy `use='dot'` order); tables of
    // Savitzky & Golay, Anal. Chem. 36, 1627 (1964), as corrected by Steinier, Termonia &
    // Deltour, Anal. Chem. 44, 1906 (1972) (both from memory, status M).
    // Smoothing, quadratic = cubic.
    check_row(5, &[2, 3], 0, &[-3., 12., 17., 12., -3.], 35.0);
    check_row(7, &[2, 3], 0, &[-2., 3., 6., 7., 6., 3., -2.], 21.0);
    check_row(
        9,
        &[2, 3],
        0,
        &[-21., 14., 39., 54., 59., 54., 39., 14., -21.],
        231.0,
    );
    // Smoothing, quartic = quintic.
    check_row(7, &[4, 5], 0, &[5., -30., 75., 131., 75., -30., 5.], 231.0);
    check_row(
        9,
        &[4, 5],
        0,
        &[15., -55., 30., 135., 179., 135., 30., -55., 15.],
        429.0,
    );
    // First derivative, linear = quadratic.
    check_row(5, &[1, 2], 1, &[-2., -1., 0., 1., 2.], 10.0);
    check_row(7, &[1, 2], 1, &[-3., -2., -1., 0., 1., 2., 3.], 28.0);
    check_row(
        9,
        &[1, 2],
        1,
        &[-4., -3., -2., -1., 0., 1., 2., 3., 4.],
        60.0,
    );
    // First derivative, cubic = quartic.
    check_row(5, &[3, 4], 1, &[1., -8., 0., 8., -1.], 12.0);
    check_row(7, &[3, 4], 1, &[22., -67., -58., 0., 58., 67., -22.], 252.0);
    check_row(
        9,
        &[3, 4],
        1,
        &[86., -142., -193., -126., 0., 126., 193., 142., -86.],
        1188.0,
    );
    // Second derivative (includes the factor 2), quadratic = cubic.
    check_row(5, &[2, 3], 2, &[2., -1., -2., -1., 2.], 7.0);
    check_row(7, &[2, 3], 2, &[5., 0., -3., -4., -3., 0., 5.], 42.0);
    check_row(
        9,
        &[2, 3],
        2,
        &[28., 7., -8., -17., -20., -17., -8., 7., 28.],
        462.0,
    );
}

#[test]
fn savgol_worked_cubic() {
    // check-values §9 (V): y = 0.5x³ − 2x² + x, window 7, order 3: at x = 10 the first
    // derivative is 111 and the second 26. Spacing 0.5 exercises the division by Δx^k.
    let x: Vec<f64> = (0..41).map(|i| i as f64 * 0.5).collect();
    let y: Vec<f64> = x
        .iter()
        .map(|&v| 0.5 * v * v * v - 2.0 * v * v + v)
        .collect();
    let j = 20; // x = 10
    let d1 = savgol_1d(&y, &x, SavgolSpec::new(7, 3, 1).unwrap()).unwrap();
    let d2 = savgol_1d(&y, &x, SavgolSpec::new(7, 3, 2).unwrap()).unwrap();
    assert!((d1[j] - 111.0).abs() < 1e-9, "{}", d1[j]);
    assert!((d2[j] - 26.0).abs() < 1e-9, "{}", d2[j]);
    // The shifted edge windows are exact for a cubic too (the fit reproduces it).
    assert!((d1[0] - 1.0).abs() < 1e-9 && (d1[40] - (1.5 * 400.0 - 80.0 + 1.0)).abs() < 1e-8);
}

#[test]
fn savgol_worked_sine() {
    // check-values §9 (V): sin x, Δx = 0.25, window 9, order 3: derivative at x = 2.5 is
    // −0.799 138 (cos 2.5 = −0.801 144; the difference is the finite-window bias).
    let x: Vec<f64> = (0..21).map(|i| i as f64 * 0.25).collect();
    let y: Vec<f64> = x.iter().map(|v| v.sin()).collect();
    let d = savgol_1d(&y, &x, SavgolSpec::new(9, 3, 1).unwrap()).unwrap();
    assert!((d[10] - -0.799_138).abs() < 1e-6, "{}", d[10]);
}

/// A polynomial Σ a_i (x − c)^i and its k-th derivative.
fn poly_deriv(a: &[f64], c: f64, x: f64, k: usize) -> f64 {
    let mut s = 0.0;
    for (i, &ai) in a.iter().enumerate().skip(k) {
        let falling: f64 = ((i - k + 1)..=i).map(|v| v as f64).product();
        s += ai * falling * (x - c).powi((i - k) as i32);
    }
    s
}

proptest! {
    #[test]
    fn savgol_exact_on_polynomials_of_fit_order_non_uniform(
        order in 0usize..5,
        extra in 0usize..4,
        deriv_pick in 0usize..5,
        steps in proptest::collection::vec(0.3f64..1.7, 30..60),
        coeffs in proptest::collection::vec(-2.0f64..2.0, 5),
    ) {
        // A least-squares polynomial of degree p reproduces any polynomial of degree p
        // exactly, on any coordinates (the defining property of the Savitzky–Golay fit).
        // The smallest odd window above the order, plus 0–3 points, made odd.
        let w = order + 1 + extra;
        let window = if w % 2 == 0 { w + 1 } else { w };
        let deriv = deriv_pick.min(order);
        let mut x = vec![0.0];
        for s in &steps { let last = *x.last().unwrap(); x.push(last + s); }
        let c = x[x.len() / 2];
        let a = &coeffs[..=order];
        let y: Vec<f64> = x.iter().map(|&v| poly_deriv(a, c, v, 0)).collect();
        let got = savgol_1d(&y, &x, SavgolSpec::new(window, order, deriv).unwrap()).unwrap();
        let scale = y.iter().fold(1.0f64, |m, v| m.max(v.abs()));
        for (j, &g) in got.iter().enumerate() {
            let want = poly_deriv(a, c, x[j], deriv);
            prop_assert!((g - want).abs() <= 1e-9 * scale, "j {}: {} vs {}", j, g, want);
        }
    }
}

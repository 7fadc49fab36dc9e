//! Indexing on the project's synthetic devices (several varied seeds), pure noise, a single
//! fan, free-fit recovery of known lines, and the geometric lever arm.

use fanmark_core::constants::E_OVER_H;
use fanmark_core::gate::Dielectric;
use fanmark_core::index::calibrate::from_geometry;
use fanmark_core::index::fit::{fit_line, index_fit, FitPoint, IndexBounds};
use fanmark_core::index::run::StateClass;
use fanmark_core::index::stack::Stack;
use fanmark_core::index::{index_map, synthetic, IndexOptions};
use fanmark_core::map::{Axis, Channel, ChannelKind, Map, Quantity};
use fanmark_core::synth::{generate, DeviceName, SynthConfig};
use fanmark_core::Rational;
use ndarray::Array2;

fn r(p: i64, q: i64) -> Rational {
    Rational::new(p, q).unwrap()
}

/// Precision and recall of the indexed states against the generator's truth (match by equal
/// (t, s); invisible truth states are neither required nor counted when found).
fn precision_recall(dev: DeviceName, seed: u64, stack: Stack) -> (f64, f64, f64, f64) {
    let s = generate(&SynthConfig::varied(dev, seed)).unwrap();
    let map = synthetic::synthesis_map(&s).unwrap();
    let rep = index_map(&map, &IndexOptions::new(stack)).unwrap();
    let truth: Vec<_> = s.truth.states.iter().filter(|x| x.t.is_some()).collect();
    let (mut tp, mut fp) = (0, 0);
    for st in &rep.states {
        match truth
            .iter()
            .find(|x| x.t == Some(st.t) && x.s == Some(st.s))
        {
            Some(x) if x.visible => tp += 1,
            Some(_) => {}
            None => fp += 1,
        }
    }
    let vis: Vec<_> = truth.iter().filter(|x| x.visible).collect();
    let found = vis
        .iter()
        .filter(|x| {
            rep.states
                .iter()
                .any(|st| Some(st.t) == x.t && Some(st.s) == x.s)
        })
        .count();
    let p = tp as f64 / (tp + fp).max(1) as f64;
    let rc = found as f64 / vis.len().max(1) as f64;
    let da = rep.calibration.alpha_cm2_per_v / s.truth.alpha_cm2_per_v - 1.0;
    let dv = rep.calibration.v_cnp_v - s.truth.v_cnp_v;
    eprintln!(
        "{dev} seed {seed}: P {p:.2} R {rc:.2} α {:+.2}% ΔV_CNP {dv:+.3} V",
        100.0 * da
    );
    (p, rc, da, dv)
}

#[test]
fn monolayer_device_calibration_and_states_over_seeds() {
    let mut ps = Vec::new();
    let mut rs = Vec::new();
    for seed in [1, 2, 3] {
        let (p, rc, da, dv) = precision_recall(DeviceName::Wren, seed, Stack::Monolayer);
        // Done-criteria of the calibration: α within 2 %, V_CNP within 0.3 V of the truth.
        assert!(da.abs() < 0.02, "seed {seed}: α off by {:.2} %", 100.0 * da);
        assert!(dv.abs() < 0.3, "seed {seed}: V_CNP off by {dv} V");
        ps.push(p);
        rs.push(rc);
    }
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    assert!(mean(&ps) >= 0.9, "precision {ps:?}");
    assert!(mean(&rs) >= 0.9, "recall {rs:?}");
}

#[test]
fn moire_device_is_indexed_with_n0() {
    // Measured, not yet at the done-criteria for the states (see the table test); the
    // calibration meets its criterion (α within 2 %) on this seed and Wannier states are found.
    let s = generate(&SynthConfig::varied(DeviceName::Tern, 6)).unwrap();
    let map = synthetic::synthesis_map(&s).unwrap();
    let rep = index_map(&map, &IndexOptions::new(Stack::MonolayerMoire)).unwrap();
    let da = rep.calibration.alpha_cm2_per_v / s.truth.alpha_cm2_per_v - 1.0;
    assert!(da.abs() < 0.02, "α off by {:.2} %", 100.0 * da);
    let m = rep.moire.expect("n₀ found");
    let dn = m.n0_cm2 / s.truth.n0_cm2.unwrap() - 1.0;
    assert!(dn.abs() < 0.03, "n₀ off by {:.2} %", 100.0 * dn);
    assert!(rep.states.iter().any(|x| x.kind == StateClass::Wannier));
}

fn map_of(rxx: Array2<f64>, gate: (f64, f64), field: (f64, f64)) -> Map {
    let (rows, cols) = rxx.dim();
    // Axis::uniform takes (start, step, count).
    let dx = (gate.1 - gate.0) / (cols - 1) as f64;
    let dy = (field.1 - field.0) / (rows - 1) as f64;
    let x = Axis::uniform("vg", Quantity::Gate, gate.0, dx, cols).unwrap();
    let y = Axis::uniform("b", Quantity::Field, field.0, dy, rows).unwrap();
    let mut m = Map::new(x, y);
    m.add_channel(Channel::new("rxx", ChannelKind::Rxx, rxx))
        .unwrap();
    m
}

/// Deterministic pseudo-noise (xorshift), standard normal by Box–Muller.
fn noise(seed: u64, n: usize) -> Vec<f64> {
    let mut s = seed | 1;
    let mut u = || {
        s ^= s << 13;
        s ^= s >> 7;
        s ^= s << 17;
        (s >> 11) as f64 / (1u64 << 53) as f64
    };
    (0..n)
        .map(|_| {
            let (a, b) = (u().max(1e-300), u());
            (-2.0 * a.ln()).sqrt() * (std::f64::consts::TAU * b).cos()
        })
        .collect()
}

fn given_calibration() -> fanmark_core::index::calibrate::Calibration {
    fanmark_core::index::calibrate::Calibration {
        alpha_cm2_per_v: 7.5e10,
        alpha_sigma_cm2_per_v: 0.0,
        v_cnp_v: 0.0,
        v_cnp_sigma_v: 0.0,
        method: fanmark_core::index::calibrate::CalibrationMethod::Given,
        methods: vec![],
        notes: vec![],
    }
}

#[test]
fn pure_noise_gives_no_fractional_or_wannier_states() {
    // Searched as a moiré device: the superlattice search must not invent n₀ in noise.
    let (rows, cols) = (120, 400);
    let z = noise(7, rows * cols);
    let rxx = Array2::from_shape_fn((rows, cols), |(i, j)| 1000.0 + 20.0 * z[i * cols + j]);
    let map = map_of(rxx, (-40.0, 40.0), (0.0, 12.0));
    let mut o = IndexOptions::new(Stack::MonolayerMoire);
    o.calibration = Some(given_calibration());
    let rep = index_map(&map, &o).unwrap();
    assert!(rep.moire.is_none(), "n₀ in noise: {:?}", rep.moire);
    assert!(
        rep.states
            .iter()
            .all(|s| !matches!(s.kind, StateClass::Fractional | StateClass::Wannier)),
        "{:?}",
        rep.states
    );
    assert!(
        rep.states.len() <= 1,
        "noise gave {} states",
        rep.states.len()
    );
}

#[test]
fn a_single_fan_gives_integers_only() {
    // Minima of R_xx along ν = ±2, ±6, ±10 (gate model α = 7.5×10¹⁰ cm⁻²/V, V_CNP = 0).
    let (rows, cols) = (100, 500);
    let x0 = -40.0;
    let dx = 80.0 / (cols - 1) as f64;
    let z = noise(11, rows * cols);
    let rxx = Array2::from_shape_fn((rows, cols), |(i, j)| {
        let b = 12.0 * i as f64 / (rows - 1) as f64;
        let v = x0 + dx * j as f64;
        let n = 7.5e14 * v;
        let mut r = 2000.0;
        for nu in [2.0, 6.0, 10.0, -2.0, -6.0, -10.0] {
            let d = (n - nu * E_OVER_H * b) / (0.3 * E_OVER_H * b.max(0.5));
            r *= 1.0 - 0.95 * (-d * d).exp() * (b / 12.0).min(1.0);
        }
        r + 10.0 * z[i * cols + j]
    });
    let map = map_of(rxx, (-40.0, 40.0), (0.0, 12.0));
    let mut o = IndexOptions::new(Stack::MonolayerMoire);
    o.calibration = Some(given_calibration());
    let rep = index_map(&map, &o).unwrap();
    assert!(rep.moire.is_none(), "fake superlattice {:?}", rep.moire);
    for nu in [2, 6, 10, -2, -6, -10] {
        assert!(
            rep.states.iter().any(|s| s.t == r(nu, 1) && s.s.is_zero()),
            "ν = {nu} not found"
        );
    }
    assert!(
        rep.states
            .iter()
            .all(|s| !matches!(s.kind, StateClass::Fractional | StateClass::Wannier)),
        "{:?}",
        rep.states.iter().map(|s| (s.t, s.s)).collect::<Vec<_>>()
    );
}

fn noisy_points(t: Rational, s: Rational, n0: f64, seed: u64) -> Vec<FitPoint> {
    let z = noise(seed, 40);
    (0..40)
        .map(|i| {
            let b = 6.0 + 8.0 * i as f64 / 39.0;
            let n = t.to_f64() * E_OVER_H * b + s.to_f64() * n0;
            let sigma = 2e13;
            FitPoint {
                n_m2: n + sigma * z[i],
                b_t: b,
                sigma_n_m2: sigma,
            }
        })
        .collect()
}

#[test]
fn free_fit_recovers_known_lines() {
    // n₀ of a graphene/hBN cell near alignment, ≈ 6×10¹¹ cm⁻² (order of check-values §5).
    let n0 = 6.0e15;
    for (k, (t, s)) in [(r(1, 3), r(2, 3)), (r(2, 1), r(-1, 2)), (r(-3, 1), r(4, 3))]
        .into_iter()
        .enumerate()
    {
        let fit = fit_line(&noisy_points(t, s, n0, 100 + k as u64)).unwrap();
        let c = index_fit(&fit, Some(n0), &IndexBounds::default());
        assert_eq!((c[0].t, c[0].s), (t, s), "{c:?}");
    }
    let fit = fit_line(&noisy_points(r(4, 9), Rational::ZERO, n0, 5)).unwrap();
    let c = index_fit(&fit, None, &IndexBounds::default());
    assert_eq!(c[0].t, r(4, 9), "{c:?}");
}

#[test]
fn free_fit_returns_several_candidates_when_points_cannot_tell() {
    // Few, very noisy points over a short field range.
    let n0 = 6.0e15;
    let z = noise(3, 5);
    let pts: Vec<FitPoint> = (0..5)
        .map(|i| {
            let b = 10.0 + 0.5 * i as f64;
            FitPoint {
                n_m2: (2.0 / 3.0) * E_OVER_H * b + 5e14 * z[i],
                b_t: b,
                sigma_n_m2: 5e14,
            }
        })
        .collect();
    let c = index_fit(&fit_line(&pts).unwrap(), Some(n0), &IndexBounds::default());
    assert!(c.len() >= 3, "{c:?}");
    assert!(c
        .windows(2)
        .all(|w| w[0].residual_sigma <= w[1].residual_sigma));
}

#[test]
fn geometric_lever_arm_of_285_nm_oxide() {
    // check-values §3: SiO₂, ε_r 3.9, d = 285 nm → 7.562 37×10¹⁰ cm⁻² V⁻¹.
    let e = from_geometry(&Dielectric {
        thickness_m: 285e-9,
        epsilon_r: 3.9,
    })
    .unwrap();
    assert!((e.alpha_cm2_per_v / 7.562_37e10 - 1.0).abs() < 1e-5);
}

#[test]
fn a_device_without_superlattice_searched_as_moire_gets_no_n0() {
    // The monolayer device has no moiré cell: searching it for one must find none and report
    // no Wannier states, on several varied measurements.
    for seed in [1, 2, 3] {
        let s = generate(&SynthConfig::varied(DeviceName::Wren, seed)).unwrap();
        assert!(s.truth.n0_cm2.is_none());
        let map = synthetic::synthesis_map(&s).unwrap();
        let rep = index_map(&map, &IndexOptions::new(Stack::MonolayerMoire)).unwrap();
        assert!(rep.moire.is_none(), "seed {seed}: fake n₀ {:?}", rep.moire);
        assert!(rep.brown_zak.is_empty(), "seed {seed}");
        assert!(
            rep.states.iter().all(|x| x.kind != StateClass::Wannier),
            "seed {seed}"
        );
        assert!(rep.states.iter().any(|x| x.t == r(2, 1) && x.s.is_zero()));
    }
}

/// The insulating peaks of R_xx at zero field and the note they give a moiré device indexed as
/// a monolayer. Physics: a monolayer has one resistance maximum, at charge neutrality; an
/// aligned moiré device also has the band insulators at n = ±4 n₀ (full filling of the
/// four-fold degenerate miniband, common practice for graphene on hBN), and the generator's
/// moiré device has smaller peaks at ±2 n₀, where its carriers change from the main cone's to a
/// satellite cone's (the Hall sign changes).
#[test]
fn insulating_peaks_tell_a_moire_device_from_a_monolayer() {
    use fanmark_core::index::calibrate::{calibrate_map, insulating_peaks};
    use fanmark_core::index::features::{find_minima, gap_map, GapMapOptions};
    for seed in [1, 2, 3] {
        let s = generate(&SynthConfig::varied(DeviceName::Wren, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let peaks = insulating_peaks(&map);
        assert_eq!(peaks.len(), 1, "wren {seed}: {peaks:?}");
        assert!(
            (peaks[0] - s.truth.v_cnp_v).abs() < 0.5,
            "wren {seed}: {peaks:?}"
        );
        let gap = gap_map(&map, &GapMapOptions::default()).unwrap();
        let minima = find_minima(&map, &gap, 3.0);
        let cal = calibrate_map(&map, &minima, Stack::Monolayer, None).unwrap();
        assert!(
            cal.notes.iter().all(|n| !n.contains("monolayer-moire")),
            "wren {seed}: {:?}",
            cal.notes
        );
    }
    let mut tested = 0;
    for seed in 6..=10 {
        let s = generate(&SynthConfig::varied(DeviceName::Tern, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let (v0, alpha, n0) = (
            s.truth.v_cnp_v,
            s.truth.alpha_cm2_per_v,
            s.truth.n0_cm2.unwrap(),
        );
        let peaks = insulating_peaks(&map);
        let (g0, g1) = (map.x().min(), map.x().max());
        // Every peak inside the gate range, with room for its far side, is found within 3 %
        // of the range: charge neutrality and the band insulators at s = ±4.
        let want: Vec<f64> = [-4.0, 0.0, 4.0]
            .iter()
            .map(|s| v0 + s * n0 / alpha)
            .filter(|v| *v > g0 + 0.05 * (g1 - g0) && *v < g1 - 0.05 * (g1 - g0))
            .collect();
        // A measurement whose gate range ends at a band insulator has only neutrality to show.
        if want.len() < 2 {
            continue;
        }
        tested += 1;
        for w in &want {
            assert!(
                peaks.iter().any(|p| (p - w).abs() < 0.03 * (g1 - g0)),
                "tern {seed}: no peak near {w:.3} V in {peaks:?}"
            );
        }
        // Nothing else: every peak found lies at a band insulator, charge neutrality or the
        // half-filled miniband (s = ±2).
        for p in &peaks {
            assert!(
                [-4.0, -2.0, 0.0, 2.0, 4.0]
                    .iter()
                    .any(|s| (p - (v0 + s * n0 / alpha)).abs() < 0.03 * (g1 - g0)),
                "tern {seed}: peak at {p:.3} V is at no filling of the miniband"
            );
        }
        let gap = gap_map(&map, &GapMapOptions::default()).unwrap();
        let minima = find_minima(&map, &gap, 3.0);
        let cal = calibrate_map(&map, &minima, Stack::Monolayer, None).unwrap();
        assert!(
            cal.notes.iter().any(|n| n.contains("monolayer-moire")),
            "tern {seed}: {:?}",
            cal.notes
        );
        let cal = calibrate_map(&map, &minima, Stack::MonolayerMoire, None).unwrap();
        assert!(cal.notes.iter().all(|n| !n.contains("insulating peaks")));
    }
    assert!(
        tested >= 2,
        "{tested} moiré measurements show two peaks or more"
    );
}

#[test]
fn hall_slope_and_quantum_hall_calibrations_agree_within_uncertainties() {
    use fanmark_core::index::calibrate::{from_hall_slope, from_quantum_hall};
    use fanmark_core::index::features::{find_minima, gap_map, GapMapOptions};
    let mut compared = 0;
    for (dev, seed, stack) in [
        (DeviceName::Wren, 1, Stack::Monolayer),
        (DeviceName::Wren, 2, Stack::Monolayer),
        (DeviceName::Wren, 3, Stack::Monolayer),
        (DeviceName::Wren, 4, Stack::Monolayer),
        (DeviceName::Wren, 5, Stack::Monolayer),
    ] {
        let s = generate(&SynthConfig::varied(dev, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let gap = gap_map(&map, &GapMapOptions::default()).unwrap();
        let minima = find_minima(&map, &gap, 3.0);
        let mut notes = Vec::new();
        let (Some(b), Some(a)) = (
            from_quantum_hall(&map, &minima, stack, None, &mut notes),
            from_hall_slope(&map, None),
        ) else {
            continue;
        };
        compared += 1;
        // Agreement at three combined standard uncertainties (common practice for a
        // consistency check of two independent estimates).
        let sa = a.alpha_sigma_cm2_per_v.hypot(b.alpha_sigma_cm2_per_v);
        let da = (a.alpha_cm2_per_v - b.alpha_cm2_per_v).abs();
        assert!(
            da <= 3.0 * sa,
            "{dev} {seed}: α {} vs {} (σ {sa})",
            a.alpha_cm2_per_v,
            b.alpha_cm2_per_v
        );
        let (va, vb) = (a.v_cnp_v.unwrap(), b.v_cnp_v.unwrap());
        let sv = a.v_cnp_sigma_v.unwrap().hypot(b.v_cnp_sigma_v.unwrap());
        assert!(
            (va - vb).abs() <= 3.0 * sv,
            "{dev} {seed}: V_CNP {va} vs {vb} (σ {sv})"
        );
        // Each uncertainty is honest against the truth too.
        for e in [a, b] {
            let d = (e.alpha_cm2_per_v - s.truth.alpha_cm2_per_v).abs();
            assert!(
                d <= 3.0 * e.alpha_sigma_cm2_per_v,
                "{dev} {seed} {:?}: α off by {d} with σ {}",
                e.method,
                e.alpha_sigma_cm2_per_v
            );
        }
        // The quantum Hall uncertainty is not the naive one of thousands of points: at least
        // 10⁻⁴ relative on these maps.
        assert!(b.alpha_sigma_cm2_per_v / b.alpha_cm2_per_v > 1e-4);
    }
    assert!(compared >= 4, "only {compared} maps had both methods");
}

#[test]
fn hall_plateaus_confirm_states_and_a_wrong_hall_scale_contradicts_them() {
    use fanmark_core::index::run::HALL_CONTRADICTION_CONFIDENCE;
    let s = generate(&SynthConfig::varied(DeviceName::Wren, 2)).unwrap();
    let map = synthetic::synthesis_map(&s).unwrap();
    let rep = index_map(&map, &IndexOptions::new(Stack::Monolayer)).unwrap();
    // On a quantum Hall plateau σ_xy = ν e²/h (von Klitzing): ν = ±2, ±6 agree.
    for nu in [2, -2, 6, -6] {
        let st = rep
            .states
            .iter()
            .find(|x| x.t == r(nu, 1) && x.s.is_zero())
            .unwrap_or_else(|| panic!("ν = {nu} not found"));
        let h = st.hall_check.as_ref().expect("the map has R_xy");
        assert_eq!(h.verdict, "agrees", "ν = {nu}: {h:?}");
        assert!(h.plateau_rows >= 3);
        assert!((h.sigma_xy_e2h - nu as f64).abs() < 0.2, "{h:?}");
        assert_eq!(st.confidence, 1.0);
    }
    // R_xy halved (a wrong amplifier gain): the plateaus sit at σ_xy ≈ 2ν, which contradicts
    // every ν found from R_xx; the states are kept, flagged and trusted less.
    let mut bad = map.clone();
    let mut c = map.channel_of(ChannelKind::Rxy).unwrap().clone();
    c.data.mapv_inplace(|v| 0.5 * v);
    bad.set_channel(c).unwrap();
    let mut o = IndexOptions::new(Stack::Monolayer);
    o.calibration = Some(rep.calibration.clone());
    let rb = index_map(&bad, &o).unwrap();
    for nu in [2, -2] {
        let st = rb
            .states
            .iter()
            .find(|x| x.t == r(nu, 1) && x.s.is_zero())
            .unwrap_or_else(|| panic!("ν = {nu} not found"));
        let h = st.hall_check.as_ref().unwrap();
        assert_eq!(h.verdict, "contradicts", "ν = {nu}: {h:?}");
        assert!(st.flags.iter().any(|f| f == "hall_contradiction"));
        assert_eq!(st.confidence, HALL_CONTRADICTION_CONFIDENCE);
    }
}

#[test]
fn brown_zak_fields_are_found_as_horizontal_features() {
    // B_q = φ₀ n₀ / q with φ₀ = h/e (check-values §1): the truth lists these fields.
    let (mut found, mut expected) = (0, 0);
    for seed in [6, 8, 9, 10] {
        let s = generate(&SynthConfig::varied(DeviceName::Tern, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let rep = index_map(&map, &IndexOptions::new(Stack::MonolayerMoire)).unwrap();
        let truth: Vec<_> = s
            .truth
            .states
            .iter()
            .filter(|x| x.b_t.is_some() && x.visible)
            .collect();
        expected += truth.len();
        for bz in &rep.brown_zak {
            let t = truth
                .iter()
                .find(|x| x.phi_over_phi0 == Some(bz.phi_over_phi0))
                .unwrap_or_else(|| panic!("seed {seed}: no Brown–Zak field {}", bz.phi_over_phi0));
            let bt = t.b_t.unwrap();
            // n₀ is known to ~2 %, so is B_q.
            assert!(
                (bz.b_t / bt - 1.0).abs() < 0.03,
                "seed {seed}: {} T vs {bt} T",
                bz.b_t
            );
            found += 1;
        }
    }
    assert!(
        found as f64 >= 0.6 * expected as f64,
        "found {found} of {expected} Brown–Zak fields"
    );
}

#[test]
fn precision_recall_table_over_seeds_and_devices() {
    // The table of the report. The monolayer (ten seeds) and the moiré device (seeds 6–10)
    // meet the done-criteria (P ≥ 0.9 on every seed, mean P and mean R ≥ 0.9 over the seeds),
    // each held a little above them where it reaches further (mean P ≥ 0.95, every seed's
    // R ≥ 0.8 or 0.85); the moiré device also meets the calibration criteria (α within 2 %,
    // V_CNP within 0.3 V, n₀ within 3 %) on every one of those seeds. Ten more moiré seeds
    // follow, held to what they reach now.
    eprintln!("device seed precision recall Δα/α ΔV_CNP(V) Δn₀/n₀");
    let mean = |v: &[f64]| v.iter().sum::<f64>() / v.len() as f64;
    let (mut wren_p, mut wren_r) = (Vec::new(), Vec::new());
    for seed in 1..=10 {
        let (p, rc, da, dv) = precision_recall(DeviceName::Wren, seed, Stack::Monolayer);
        eprintln!("wren {seed} {p:.2} {rc:.2} {:+.2}% {dv:+.3} -", 100.0 * da);
        assert!(p >= 0.95, "wren seed {seed}: precision {p:.2}");
        assert!(rc >= 0.8, "wren seed {seed}: recall {rc:.2}");
        assert!(
            da.abs() < 0.02 && dv.abs() < 0.3,
            "wren seed {seed}: calibration"
        );
        wren_p.push(p);
        wren_r.push(rc);
    }
    assert!(mean(&wren_p) >= 0.95, "wren precision {wren_p:?}");
    assert!(mean(&wren_r) >= 0.9, "wren recall {wren_r:?}");
    let (mut tern_p, mut tern_r) = (Vec::new(), Vec::new());
    let mut calibrated = 0;
    for seed in 6..=10 {
        let (p, rc, da, dv) = precision_recall(DeviceName::Tern, seed, Stack::MonolayerMoire);
        let s = generate(&SynthConfig::varied(DeviceName::Tern, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let rep = index_map(&map, &IndexOptions::new(Stack::MonolayerMoire)).unwrap();
        let dn = rep.moire.map(|m| m.n0_cm2 / s.truth.n0_cm2.unwrap() - 1.0);
        eprintln!(
            "tern {seed} {p:.2} {rc:.2} {:+.2}% {dv:+.3} {}",
            100.0 * da,
            dn.map_or("none".to_string(), |d| format!("{:+.2}%", 100.0 * d))
        );
        if let Some(d) = dn {
            // Done-criterion: n₀ within 3 % of the truth whenever it is reported.
            assert!(
                d.abs() < 0.03,
                "tern seed {seed}: n₀ off by {:.2} %",
                100.0 * d
            );
        }
        if da.abs() < 0.02 && dv.abs() < 0.3 && dn.is_some() {
            calibrated += 1;
        }
        assert!(p >= 0.9, "tern seed {seed}: precision {p:.2}");
        assert!(rc >= 0.85, "tern seed {seed}: recall {rc:.2}");
        tern_p.push(p);
        tern_r.push(rc);
    }
    assert!(mean(&tern_p) >= 0.95, "tern precision {tern_p:?}");
    // Done-criterion.
    assert!(mean(&tern_r) >= 0.9, "tern recall {tern_r:?}");
    assert!(
        calibrated == 5,
        "calibration criteria met on {calibrated} of 5 moiré seeds"
    );
    // Ten more moiré seeds, reported beside them and held to what the indexer reaches there
    // now (below the criterion: coarse gate steps and few field rows cost recall most).
    let (mut all_p, mut all_r) = (tern_p, tern_r);
    for seed in (1..=5).chain(11..=15) {
        let (p, rc, _, _) = precision_recall(DeviceName::Tern, seed, Stack::MonolayerMoire);
        eprintln!("tern {seed} {p:.2} {rc:.2} (wider set)");
        assert!(p >= 0.85, "tern seed {seed}: precision {p:.2}");
        assert!(rc >= 0.75, "tern seed {seed}: recall {rc:.2}");
        all_p.push(p);
        all_r.push(rc);
    }
    eprintln!(
        "tern over 15 seeds: mean P {:.3} R {:.3}",
        mean(&all_p),
        mean(&all_r)
    );
    assert!(mean(&all_p) >= 0.94, "tern precision {all_p:?}");
    assert!(mean(&all_r) >= 0.86, "tern recall {all_r:?}");
}

#[test]
fn hall_slope_calibrates_the_moire_device_across_its_van_hove_sign_changes() {
    // Past ±2n₀ the Hall coefficient of the moiré band changes sign, so 1/(e R_H) jumps from
    // large positive to large negative; the low-field Hall method must take the run through
    // charge neutrality (between those jumps), not a satellite's. Criterion of the issue:
    // α within 2 %, V_CNP within 0.3 V (here held to 0.05 V).
    for seed in 6..=10 {
        let s = generate(&SynthConfig::varied(DeviceName::Tern, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let e = fanmark_core::index::calibrate::from_hall_slope(&map, None)
            .unwrap_or_else(|| panic!("seed {seed}: no Hall-slope calibration"));
        let da = e.alpha_cm2_per_v / s.truth.alpha_cm2_per_v - 1.0;
        let dv = e.v_cnp_v.unwrap() - s.truth.v_cnp_v;
        assert!(da.abs() < 0.02, "seed {seed}: α off by {:.2} %", 100.0 * da);
        assert!(dv.abs() < 0.05, "seed {seed}: V_CNP off by {dv} V");
    }
}

#[test]
fn fractions_beside_the_neutrality_insulator_are_seen_in_rxx() {
    // ν = ±1/3 lie a third of a Landau level from ν = 0, where σ_xx's wide trough fills the
    // combined gap strength; the fan lines looked at again on R_xx alone find them. Every
    // ν = ±1/3 the truth calls visible is indexed on wren seeds 1–4 (seed 5, with the coarsest
    // gate grid of the five, still misses them).
    let mut checked = 0;
    for seed in 1..=4 {
        let s = generate(&SynthConfig::varied(DeviceName::Wren, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let rep = index_map(&map, &IndexOptions::new(Stack::Monolayer)).unwrap();
        for third in [r(1, 3), r(-1, 3)] {
            let visible = s
                .truth
                .states
                .iter()
                .any(|x| x.visible && x.t == Some(third) && x.s == Some(Rational::ZERO));
            if visible {
                checked += 1;
                assert!(
                    rep.states.iter().any(|st| st.t == third && st.s.is_zero()),
                    "wren seed {seed}: ν = {third} is visible but not indexed"
                );
            }
        }
    }
    assert!(
        checked >= 4,
        "only {checked} visible ν = ±1/3 states to check"
    );
}

#[test]
fn calibration_notes_are_said_once() {
    // The moiré demo device's fans converge at three gate voltages, which both passes of the
    // fan fit note; the report says it once.
    let s = generate(&SynthConfig::demo(DeviceName::Tern)).unwrap();
    let map = synthetic::synthesis_map(&s).unwrap();
    let rep = index_map(&map, &IndexOptions::new(Stack::MonolayerMoire)).unwrap();
    let notes = &rep.calibration.notes;
    assert!(
        notes.iter().any(|n| n.starts_with("fans converge")),
        "{notes:?}"
    );
    for (i, n) in notes.iter().enumerate() {
        assert!(!notes[..i].contains(n), "said twice: {n}");
    }
}

#[test]
fn moire_calibration_meets_the_criteria_on_fifteen_seeds() {
    // Criteria of the issue: α within 2 %, V_CNP within 0.3 V (here held to 0.05 V), n₀
    // within 3 %, on
    // varied seeds well beyond the five of the precision/recall table. In a moiré device the
    // main cone's minima include satellite, symmetry-broken and Hofstadter states that a fan
    // fit can take for its own, so a precise low-field Hall slope is chosen.
    use fanmark_core::index::calibrate::{calibrate_map, moire_density, CalibrationMethod};
    use fanmark_core::index::features::{find_minima, gap_map, GapMapOptions};
    for seed in 1..=15 {
        let s = generate(&SynthConfig::varied(DeviceName::Tern, seed)).unwrap();
        let map = synthetic::synthesis_map(&s).unwrap();
        let gap = gap_map(&map, &GapMapOptions::default()).unwrap();
        let minima = find_minima(&map, &gap, 3.0);
        let c = calibrate_map(&map, &minima, Stack::MonolayerMoire, None).unwrap();
        let da = c.alpha_cm2_per_v / s.truth.alpha_cm2_per_v - 1.0;
        let dv = c.v_cnp_v - s.truth.v_cnp_v;
        assert!(da.abs() < 0.02, "seed {seed}: α off by {:.2} %", 100.0 * da);
        assert!(dv.abs() < 0.05, "seed {seed}: V_CNP off by {dv} V");
        assert_eq!(c.method, CalibrationMethod::HallSlope, "seed {seed}");
        // Both estimates are reported side by side.
        assert!(c.methods.len() >= 2, "seed {seed}: {:?}", c.methods);
        // n₀ within 3 % (criterion of the issue), found on every seed.
        let m = moire_density(
            &map,
            &minima,
            &c.gate(),
            Stack::MonolayerMoire,
            fanmark_core::moire::HBN_MISMATCH_DEFAULT,
        )
        .unwrap_or_else(|| panic!("seed {seed}: no n₀"));
        let dn = m.n0_cm2 / s.truth.n0_cm2.unwrap() - 1.0;
        assert!(
            dn.abs() < 0.03,
            "seed {seed}: n₀ off by {:.2} %",
            100.0 * dn
        );
    }
}

#[test]
fn an_imprecise_hall_slope_does_not_overrule_the_fan() {
    // This monolayer map's field starts at 0.74 T, leaving six classical-range points: the
    // Hall slope's α is uncertain by more than its own size and cannot tell the fan's scale
    // from one twice as large. The fan is kept and meets the criterion (α within 2 %).
    use fanmark_core::index::calibrate::{calibrate_map, CalibrationMethod};
    use fanmark_core::index::features::{find_minima, gap_map, GapMapOptions};
    let s = generate(&SynthConfig::varied(DeviceName::Wren, 10)).unwrap();
    let map = synthetic::synthesis_map(&s).unwrap();
    let gap = gap_map(&map, &GapMapOptions::default()).unwrap();
    let minima = find_minima(&map, &gap, 3.0);
    let c = calibrate_map(&map, &minima, Stack::Monolayer, None).unwrap();
    let hall = c
        .methods
        .iter()
        .find(|e| e.method == CalibrationMethod::HallSlope)
        .expect("a Hall-slope estimate");
    assert!(hall.alpha_sigma_cm2_per_v > 0.1 * hall.alpha_cm2_per_v);
    assert_eq!(c.method, CalibrationMethod::QuantumHall);
    let da = c.alpha_cm2_per_v / s.truth.alpha_cm2_per_v - 1.0;
    assert!(da.abs() < 0.02, "α off by {:.2} %", 100.0 * da);
    assert!(
        c.notes.iter().any(|n| n.contains("too uncertain")),
        "{:?}",
        c.notes
    );
}

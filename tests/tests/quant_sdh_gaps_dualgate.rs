//! SdH frequency and Berry phase, activation gaps and dual-gate (n, D) maps, checked against
//! published formulas and worked values and against the synthetic devices' truth.

use fanmark_core::constants::E_OVER_H;
use fanmark_core::dualgate::{filling_lines, line_cut, CutAt};
use fanmark_core::gaps::{self, ActivatedRange, GapOptions, StateLine};
use fanmark_core::gate::{Dielectric, DualGate};
use fanmark_core::io::{load_map, LoadOptions};
use fanmark_core::map::{Axis, Channel, ChannelKind, Map, Quantity};
use fanmark_core::progress::NoProgress;
use fanmark_core::sdh::{self, amplitude_spectrum, find_peaks, At, SdhOptions, Trace, Window};
use fanmark_core::synth::dualgate::{generate_dual_gate, DualGateConfig};
use fanmark_core::synth::{self, series, Device, DeviceName, Model};
use fanmark_core::transform::{gates_to_density_displacement, DensityDisplacementGrid};
use fanmark_core::Rational;
use ndarray::Array2;

fn rel(a: f64, b: f64) -> f64 {
    (a / b - 1.0).abs()
}

/// |x mod 1| folded to the distance from the nearest integer or half-integer target `target`.
fn mod1_distance(x: f64, target: f64) -> f64 {
    let d = (x - target).rem_euclid(1.0);
    d.min(1.0 - d)
}

// ───────────────────────────── Shubnikov–de Haas ─────────────────────────────

#[test]
fn frequency_of_1e12_cm2_is_10_339_tesla() {
    // check-values §10 (V): n = 10¹² cm⁻² with g = 4 gives B_F = n h/(4e) = 10.339 169 T, and
    // B_F = 10 T gives n = 9.671 957×10¹¹ cm⁻².
    let b_f = 1e16 / (4.0 * E_OVER_H);
    assert!((b_f - 10.339_169).abs() < 1e-6, "{b_f}");
    assert!(rel(4.0 * E_OVER_H * 10.0 / 1e4, 9.671_957e11) < 1e-6);
}

#[test]
fn fft_fixture_peak() {
    // check-values §10 FFT fixture (V): cos(2πB_F/B + π), B_F = 10.339 169 T, 16 384 points
    // uniform in 1/B over 0.1–1 T⁻¹, Hann window, zero-padded to 2²⁰: peak at 10.3466 T
    // (tolerance ~0.1 %).
    let m = 16_384;
    let step = 0.9 / (m - 1) as f64;
    let v: Vec<f64> = (0..m)
        .map(|k| {
            let x = 0.1 + step * k as f64;
            (2.0 * std::f64::consts::PI * 10.339_169 * x + std::f64::consts::PI).cos()
        })
        .collect();
    let spec = amplitude_spectrum(&v, step, Window::Hann, 1 << 20).unwrap();
    let peaks = find_peaks(&spec, 1.0, 0.1);
    let f = peaks[0].0;
    assert!(rel(f, 10.3466) < 1e-3, "{f}");
    // And within the 0.5 % asked of the analysis.
    assert!(rel(f, 10.339_169) < 5e-3, "{f}");
}

/// R_xx of a Lifshitz–Kosevich-like trace: minima where B_F/B = N − N₀.
fn lk_trace(b_f: f64, n0: f64, lo: f64, hi: f64, points: usize) -> Trace {
    let b: Vec<f64> = (0..points)
        .map(|i| lo + (hi - lo) * i as f64 / (points - 1) as f64)
        .collect();
    let r = b
        .iter()
        .map(|&x| {
            let damping = (-3.0 / x).exp();
            500.0 + 40.0 / x - 300.0 * damping * (2.0 * std::f64::consts::PI * (b_f / x + n0)).cos()
        })
        .collect();
    Trace { b_t: b, rxx_ohm: r }
}

#[test]
fn monolayer_and_bilayer_like_intercepts() {
    // check-values §10 (M, high confidence; Novoselov et al., Nature 438, 197 (2005); Zhang
    // et al., Nature 438, 201 (2005); Novoselov et al., Nature Phys. 2, 177 (2006)):
    // minima at ν = 4(N+½) give intercept −½ (Berry phase π), at ν = 4N intercept 0 (2π).
    // Test |intercept mod 1| as check-values advises.
    let b_f = 10.339_169;
    for (n0, want) in [(-0.5, 0.5), (0.0, 0.0)] {
        let t = lk_trace(b_f, n0, 1.0, 9.0, 3000);
        let r = sdh::analyse_trace(&t, &SdhOptions::for_window(1.2, 8.0)).unwrap();
        assert!(rel(r.frequency_t, b_f) < 5e-3, "{}", r.frequency_t);
        // n = g e B_F / h back to 10¹² cm⁻² within 0.5 %.
        assert!(rel(r.density_m2, 1e16) < 5e-3);
        let idx = r.index.unwrap();
        assert!(
            mod1_distance(idx.intercept, want) < 0.1,
            "{}",
            idx.intercept
        );
        assert!(idx.points.len() >= 5);
        assert!(rel(idx.frequency_from_slope_t, b_f) < 5e-3);
        // The result holds what a figure needs.
        assert_eq!(r.trace.inv_b.len(), r.trace.oscillation_ohm.len());
        assert_eq!(r.spectrum.frequency_t.len(), r.spectrum.amplitude_ohm.len());
    }
}

#[test]
fn synthetic_monolayer_trace_gives_density_and_berry_phase_pi() {
    // The monolayer device `wren` at 10¹² cm⁻²: its minima sit at ν = 4(N+½), so B_F must be
    // 10.339 169 T (check-values §10) and the intercept ½ mod 1 (check-values §10, M).
    let model = Model::new(Device::of(DeviceName::Wren), 1.6, 1.0);
    let vg = model.device.gate_for_density(1e16);
    let b: Vec<f64> = (0..3000).map(|i| 1.0 + 7.0 * i as f64 / 2999.0).collect();
    let r: Vec<f64> = b.iter().map(|&x| model.ideal(vg, x).0).collect();
    let t = Trace { b_t: b, rxx_ohm: r };
    let res = sdh::analyse_trace(&t, &SdhOptions::for_window(1.2, 5.0)).unwrap();
    assert!(
        rel(res.frequency_t, 10.339_169) < 5e-3,
        "{}",
        res.frequency_t
    );
    assert!(rel(res.density_m2, 1e16) < 5e-3);
    let idx = res.index.unwrap();
    assert!(mod1_distance(idx.intercept, 0.5) < 0.1, "{}", idx.intercept);
    assert!((idx.berry_phase_over_pi - 1.0).abs() < 0.2);
    // Non-sinusoidal minima give harmonics at integer multiples.
    assert!(res.peaks.iter().any(|p| p.harmonic == 2));
}

#[test]
fn demo_map_trace_at_gate_matches_calibration() {
    let syn = synth::generate(&synth::SynthConfig::demo(DeviceName::Wren)).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("wren.csv");
    synth::write_csv(&csv, &syn).unwrap();
    let map = load_map(&csv, &LoadOptions::default(), &NoProgress).unwrap();
    let gate = syn.model.device.gate();
    let vg = gate.gate_for_density(3e16);
    let r = sdh::analyse(
        &map,
        At::Gate(vg),
        &SdhOptions::for_window(3.0, 14.0).with_gate(gate),
    )
    .unwrap();
    // The calibrated density is the truth's α(V_g − V_CNP) at the column used.
    let mis = r.density_mismatch.unwrap();
    assert!(mis.abs() < 0.01, "mismatch {mis}, B_F {}", r.frequency_t);
}

#[test]
fn sdh_bad_input_is_refused_clearly() {
    let t = lk_trace(10.0, 0.0, 1.0, 9.0, 2000);
    // Too few oscillations: 10 T · (1/7 − 1/8) = 0.18 oscillations.
    let e = sdh::analyse_trace(&t, &SdhOptions::for_window(7.0, 8.0)).unwrap_err();
    let msg = e.to_string();
    assert!(msg.contains("oscillation"), "{msg}");
    // No minima: a featureless trace.
    let flat = Trace {
        b_t: (0..500).map(|i| 1.0 + i as f64 * 0.01).collect(),
        rxx_ohm: (0..500).map(|i| 100.0 + i as f64 * 0.1).collect(),
    };
    let e = sdh::analyse_trace(&flat, &SdhOptions::for_window(1.5, 5.0)).unwrap_err();
    assert!(e.to_string().contains("oscillation"), "{e}");
    // The index fit alone refuses a trace without minima.
    let e = sdh::index_fit(&[0.1, 0.2, 0.3, 0.4, 0.5, 0.6, 0.7, 0.8], &[1.0; 8], 5.0).unwrap_err();
    assert!(e.to_string().contains("minima"), "{e}");
    // A map without a gate axis.
    let x = Axis::uniform("n", Quantity::Density, 0.0, 1e15, 4).unwrap();
    let y = Axis::uniform("b", Quantity::Field, 1.0, 1.0, 4).unwrap();
    let mut m = Map::new(x, y);
    m.add_channel(Channel::new("rxx", ChannelKind::Rxx, Array2::zeros((4, 4))))
        .unwrap();
    let e = sdh::analyse(&m, At::Gate(1.0), &SdhOptions::for_window(1.0, 3.0)).unwrap_err();
    assert!(e.to_string().contains("V_g"), "{e}");
}

// ───────────────────────────── activation gaps ─────────────────────────────

/// The (T in K, R in Ω) pairs of check-values §11 (V), from the shared fixture file.
fn arrhenius_fixture() -> (Vec<f64>, Vec<f64>) {
    include_str!("../fixtures/arrhenius_10K.csv")
        .lines()
        .filter(|l| !l.starts_with('#') && !l.starts_with("T_K"))
        .map(|l| {
            let (t, r) = l.split_once(',').expect("T,R");
            (t.parse::<f64>().unwrap(), r.parse::<f64>().unwrap())
        })
        .unzip()
}

#[test]
fn arrhenius_fixture_gives_ten_kelvin() {
    // check-values §11 (V): Δ/k_B = 10 K, R₀ = 1000 Ω, R = R₀ exp(−Δ/(2k_BT)).
    let (t, r) = arrhenius_fixture();
    assert_eq!(t, [2.0, 2.5, 3.0, 4.0, 5.0, 6.0, 8.0, 10.0]);
    let f = gaps::fit_arrhenius(&t, &r, &GapOptions::default()).unwrap();
    assert!((f.gap_k - 10.0).abs() < 1e-6, "{}", f.gap_k);
    // Slope of ln R against 1/T = −5 K (check-values §11).
    assert!((f.fit.slope + 5.0).abs() < 1e-6);
    assert!((f.r0_ohm - 1000.0).abs() < 1e-3);
    // 10 K = 0.861 733 meV (check-values §11).
    assert!((f.gap_mev - 0.861_733).abs() < 1e-6);
    assert!(f.points.iter().all(|p| p.used));
    // R(5 K)/R(10 K) = e^−0.5 = 0.606 530 660 (check-values §11).
    assert!((r[4] / r[7] - 0.606_530_660).abs() < 1e-8);
    // A 1 meV gap gives a slope of −5.802 259 K (check-values §11).
    let t1: Vec<f64> = (1..=6).map(|k| 2.0 * k as f64).collect();
    let delta_k = fanmark_core::units::mev_to_kelvin(1.0);
    let r1: Vec<f64> = t1
        .iter()
        .map(|t| 50.0 * (-delta_k / (2.0 * t)).exp())
        .collect();
    let f1 = gaps::fit_arrhenius(&t1, &r1, &GapOptions::default()).unwrap();
    assert!((f1.fit.slope + 5.802_259).abs() < 1e-5, "{}", f1.fit.slope);
    assert!((f1.gap_mev - 1.0).abs() < 1e-9);
    assert!(f.convention.contains("2·k_B·T"));
}

fn wren_series(temps: &[f64]) -> (Vec<Map>, series::TemperatureSeries, tempfile::TempDir) {
    let cfg = series::series_config(DeviceName::Wren);
    let probes = [(Rational::integer(6), Rational::ZERO, series::DEMO_FIELD_T)];
    let s = series::temperature_series(&cfg, temps, &probes).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let paths = series::write_series(dir.path(), "wren", &s).unwrap();
    let maps = paths
        .iter()
        .map(|p| load_map(p, &LoadOptions::default(), &NoProgress).unwrap())
        .collect();
    (maps, s, dir)
}

#[test]
fn temperature_series_recovers_the_generator_gap() {
    let (maps, s, _dir) = wren_series(&series::DEMO_TEMPERATURES_K);
    // The T_K column reached the maps.
    assert_eq!(maps[3].meta.temperature_k, Some(50.0));
    let gate = Device::of(DeviceName::Wren).gate();
    let a = gaps::activation(
        &maps,
        StateLine::filling(Rational::integer(6)),
        series::DEMO_FIELD_T,
        &GapOptions::with_gate(gate),
    )
    .unwrap();
    let model = Model::new(Device::of(DeviceName::Wren), 1.6, 1.0);
    let truth =
        series::activation_truth(&model, Rational::integer(6), Rational::ZERO, a.b_t).unwrap();
    assert!((a.b_t - s.gaps[0].b_t).abs() < 0.01);
    let got = a.arrhenius.gap_k;
    assert!(
        rel(got, truth.activation_gap_k) < 0.05,
        "fit {got} K vs truth {} K",
        truth.activation_gap_k
    );
    assert!(a.arrhenius.points.iter().filter(|p| p.used).count() >= 4);
}

#[test]
fn too_few_activated_points_or_one_temperature_is_refused() {
    // Only the two coldest maps: fewer than four points.
    let (maps, _s, _dir) = wren_series(&[25.0, 30.0, 40.0]);
    let gate = Device::of(DeviceName::Wren).gate();
    let opts = GapOptions::with_gate(gate);
    let st = StateLine::filling(Rational::integer(6));
    let e = gaps::activation(&maps, st, series::DEMO_FIELD_T, &opts).unwrap_err();
    assert!(e.to_string().contains("refusing to fit"), "{e}");
    let e = gaps::activation(&maps[..1], st, series::DEMO_FIELD_T, &opts).unwrap_err();
    assert!(e.to_string().contains("several temperatures"), "{e}");
    // Two maps at the same temperature.
    let same = vec![maps[0].clone(), maps[0].clone()];
    let e = gaps::activation(&same, st, series::DEMO_FIELD_T, &opts).unwrap_err();
    assert!(e.to_string().contains("distinct temperature"), "{e}");
    // A map without temperature is named.
    let mut bare = maps[0].clone();
    bare.meta.temperature_k = None;
    let e =
        gaps::activation(&[bare, maps[1].clone()], st, series::DEMO_FIELD_T, &opts).unwrap_err();
    assert!(e.to_string().contains("no temperature"), "{e}");
    // A given range with too few points.
    let given = GapOptions {
        range: ActivatedRange::Given {
            t_min_k: 24.0,
            t_max_k: 26.0,
        },
        ..opts.clone()
    };
    assert!(gaps::activation(&maps, st, series::DEMO_FIELD_T, &given).is_err());
}

// ───────────────────────────── dual gate ─────────────────────────────

fn dielectric(nm: f64, eps: f64) -> Dielectric {
    Dielectric {
        thickness_m: nm * 1e-9,
        epsilon_r: eps,
    }
}

#[test]
fn dual_gate_map_reproduces_the_reference_example_and_round_trips() {
    // check-values §3 (V): top 30 nm hBN (ε 3.4), bottom 285 nm SiO₂ (ε 3.9), V_t = 1 V,
    // V_b = 10 V: n = 1.382 557×10¹² cm⁻², D/ε₀ = −0.011 754 V/nm (D = (C_t V_t − C_b V_b)/2ε₀).
    let g = DualGate::from_dielectrics(&dielectric(30.0, 3.4), &dielectric(285.0, 3.9)).unwrap();
    // Gate ranges twice the example's: the example (1 V, 10 V) is then the centre of the
    // (n, D) parallelogram, which a 101 × 101 grid puts on its middle point.
    let vt = Axis::uniform("vt", Quantity::TopGate, 0.0, 0.1, 21).unwrap();
    let vb = Axis::uniform("vb", Quantity::BottomGate, 0.0, 1.0, 21).unwrap();
    // Channels holding the gate voltages themselves (bottom gate on x, as the loader does).
    let mut m = Map::new(vb.clone(), vt.clone());
    let top = Array2::from_shape_fn((21, 21), |(r, _)| vt.values()[r]);
    let bottom = Array2::from_shape_fn((21, 21), |(_, c)| vb.values()[c]);
    m.add_channel(Channel::new("vt", ChannelKind::Other, top))
        .unwrap();
    m.add_channel(Channel::new("vb", ChannelKind::Other, bottom))
        .unwrap();
    let grid = DensityDisplacementGrid {
        n_points: Some(101),
        d_points: Some(101),
    };
    let out = gates_to_density_displacement(&m, &g, &grid).unwrap();
    let n_mid = out.x().values()[50];
    let d_mid = out.y().values()[50];
    assert!(rel(n_mid / 1e4, 1.382_557e12) < 1e-6, "{n_mid}");
    assert!((d_mid * 1e-9 + 0.011_754).abs() < 5e-7, "{d_mid}");
    let cut_t = line_cut(&out, "vt", CutAt::Density(n_mid)).unwrap();
    let cut_b = line_cut(&out, "vb", CutAt::Density(n_mid)).unwrap();
    assert_eq!(cut_t.coordinate[50], d_mid);
    let (t, b) = (cut_t.values[50], cut_b.values[50]);
    assert!((t - 1.0).abs() < 1e-9 && (b - 10.0).abs() < 1e-9, "{t} {b}");
    // Round trip at every resampled point: (n, D) → interpolated (V_t, V_b) → (n, D).
    let (vt_c, vb_c) = (
        &out.channel("vt").unwrap().data,
        &out.channel("vb").unwrap().data,
    );
    let mut checked = 0;
    for ((r, c), &t) in vt_c.indexed_iter() {
        if t.is_finite() {
            let (n, d) = g.density_displacement(t, vb_c[[r, c]]);
            assert!((n - out.x().values()[c]).abs() < 1e-6 * 2.8e16);
            assert!((d - out.y().values()[r]).abs() < 1e-6 * 1.4e8);
            checked += 1;
        }
    }
    assert!(checked > 50, "{checked}");
}

#[test]
fn synthetic_dual_gate_map_shows_its_states_on_the_filling_lines() {
    let mut cfg = DualGateConfig::demo();
    cfg.vt_points = 121;
    cfg.vb_points = 81;
    let syn = generate_dual_gate(&cfg).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let csv = dir.path().join("dunlin.csv");
    std::fs::write(&csv, syn.csv_text()).unwrap();
    let map = load_map(&csv, &LoadOptions::default(), &NoProgress).unwrap();
    assert_eq!(map.x().quantity, Quantity::BottomGate);
    let mut g = DualGate::new(syn.truth.c_top, syn.truth.c_bottom).unwrap();
    g.v_top_offset = syn.truth.v_top_offset;
    g.v_bottom_offset = syn.truth.v_bottom_offset;
    let nd = gates_to_density_displacement(&map, &g, &DensityDisplacementGrid::default()).unwrap();
    let cut = line_cut(&nd, "rxx", CutAt::Displacement(0.0)).unwrap();
    let lines = filling_lines(
        &g,
        &[
            Rational::integer(4),
            Rational::integer(8),
            Rational::integer(-4),
        ],
        syn.truth.field_t,
        (-1e8, 1e8),
    )
    .unwrap();
    let at = |n: f64| -> f64 {
        let i = cut
            .coordinate
            .iter()
            .position(|&x| x >= n)
            .unwrap_or(cut.coordinate.len() - 1);
        cut.values[i]
    };
    for l in &lines {
        // ν = ±4, 8 minima: R_xx on the line far below R_xx half-way to the next line.
        let between = at(l.density_m2 + 2.0 * E_OVER_H * syn.truth.field_t);
        assert!(at(l.density_m2) < 0.2 * between, "ν = {}", l.nu);
        // The gate-plane ends of the line lie on it.
        for &(vt, vb) in &l.gate_ends_v {
            assert!(rel(g.density(vt, vb), l.density_m2) < 1e-9);
        }
    }
    // ν = 2 is gapped only at large |D| (truth threshold 0.12 V/nm).
    let n2 = 2.0 * E_OVER_H * syn.truth.field_t;
    let small_d = line_cut(&nd, "rxx", CutAt::Density(n2)).unwrap();
    let pick = |d: f64| {
        let i = small_d.coordinate.iter().position(|&x| x >= d).unwrap();
        small_d.values[i]
    };
    assert!(
        pick(0.3e9) < 0.3 * pick(0.0),
        "{} vs {}",
        pick(0.3e9),
        pick(0.0)
    );
}

//! Tests of the synthetic-device generator as a whole.

use super::*;
use crate::map::SweepDirection;

/// R_K = h/e² in Ω, exact since 2019 (check-values §1, from h and e of the SI Brochure).
const R_K_OHM: f64 = 25_812.807_459_304_5;
/// φ₀ = h/e in Wb from the exact SI 2019 values of h and e (check-values §1).
const PHI0_WB: f64 = 6.626_070_15e-34 / 1.602_176_634e-19;

fn small(device: DeviceName, seed: u64) -> SynthConfig {
    let mut c = SynthConfig::demo(device);
    c.seed = seed;
    c.gate_points = 90;
    c.field_points = 24;
    c
}

fn quiet(device: DeviceName) -> SynthConfig {
    let mut c = small(device, 5);
    c.noise.on = false;
    c.flaws = Flaws::none();
    c
}

#[test]
fn same_seed_same_bytes_different_seed_different_bytes() {
    let a = generate(&small(DeviceName::Wren, 11)).unwrap();
    let b = generate(&small(DeviceName::Wren, 11)).unwrap();
    let c = generate(&small(DeviceName::Wren, 12)).unwrap();
    assert_eq!(a.csv_text(), b.csv_text());
    assert_eq!(a.truth_json().unwrap(), b.truth_json().unwrap());
    assert_ne!(a.csv_text(), c.csv_text());
    let t = generate(&small(DeviceName::Tern, 11)).unwrap();
    assert_ne!(a.csv_text(), t.csv_text());
    assert!(a.csv_text().starts_with("vg_V,b_T,rxx_ohm,rxy_ohm\n"));
}

/// Visible states with integer t ≠ 0 whose line at `b` is at least `gap` (in units of (e/h)B)
/// from every other visible line.
fn isolated_integer_states(s: &Synthesis, b: f64, gap: f64) -> Vec<usize> {
    let m = &s.model;
    let e_over_h = crate::constants::E_OVER_H;
    let visible: Vec<usize> = (0..m.states.len())
        .filter(|&j| s.truth.states[j].visible && m.domain_weight_on_line(j, b) > 0.99)
        .collect();
    visible
        .iter()
        .copied()
        .filter(|&j| {
            let st = &m.states[j];
            let vg = m.device.gate_for_density(m.line_density(j, b));
            let ts = &s.truth.states[j];
            // Well developed: activation factor exp(−(Δ−Γ)/(2k_BT)) below e⁻⁸.
            let developed = (ts.gap_k.unwrap_or(0.0) - ts.broadening_k.unwrap_or(0.0))
                / (2.0 * s.truth.temperature_k)
                > 8.0;
            st.t.is_integer()
                && !st.t.is_zero()
                && developed
                && s.truth.states[j].b_onset_t.is_some_and(|o| o < b)
                && s.truth.states[j].b_max_t.is_some_and(|top| top >= b)
                && (s.truth.config.gate_range_v.0..=s.truth.config.gate_range_v.1).contains(&vg)
                && visible.iter().all(|&k| {
                    k == j
                        || (m.line_density(k, b) - m.line_density(j, b)).abs() > gap * e_over_h * b
                })
        })
        .collect()
}

#[test]
fn ideal_has_quantised_plateaus_and_minima_at_the_truth_states() {
    for (device, b) in [(DeviceName::Wren, 14.0), (DeviceName::Tern, 7.0)] {
        let s = generate(&SynthConfig::demo(device)).unwrap();
        let m = &s.model;
        let e_over_h = crate::constants::E_OVER_H;
        let checked = isolated_integer_states(&s, b, 0.6);
        assert!(
            checked.len() >= 4,
            "{device}: only {} isolated states",
            checked.len()
        );
        for j in checked {
            let t = m.states[j].t.to_f64();
            let n = m.line_density(j, b);
            let vg = m.device.gate_for_density(n);
            let (rxx, rxy) = s.ideal(vg, b);
            // Plateau R_xy = R_K/ν (check-values §1, exact h/e²).
            let want = R_K_OHM / t;
            assert!(
                (rxy / want - 1.0).abs() < 2e-3,
                "{device} {}: R_xy {rxy} vs R_K/t {want}",
                s.truth.states[j].label
            );
            // R_xx is at a deep local minimum on the line (within ±2 in filling factor).
            let window: Vec<f64> = (-100..=100)
                .map(|i| {
                    let dn = 2.0 * e_over_h * b * i as f64 / 100.0;
                    s.ideal(m.device.gate_for_density(n + dn), b).0
                })
                .collect();
            let max = window.iter().cloned().fold(0.0, f64::max);
            // Local minimum: nothing lower within ±0.6 in filling factor.
            let min = window[70..=130]
                .iter()
                .cloned()
                .fold(f64::INFINITY, f64::min);
            assert!(
                rxx <= min * 1.01 + 0.01,
                "{device} {}: {rxx} > {min}",
                s.truth.states[j].label
            );
            assert!(
                rxx < 0.05 * max,
                "{device} {}: dip {rxx} vs {max}",
                s.truth.states[j].label
            );
        }
    }
    // The ν = 2 plateau of wren at 14 T equals R_K/2 = 12 906.403 729 65 Ω (check-values §1).
    let s = generate(&quiet(DeviceName::Wren)).unwrap();
    let vg = s
        .model
        .device
        .gate_for_density(2.0 * crate::constants::E_OVER_H * 14.0);
    let (_, rxy) = s.ideal(vg, 14.0);
    assert!((rxy - 12_906.403_729_65).abs() < 1.0, "{rxy}");
}

#[test]
fn onsets_follow_the_gap_hierarchy() {
    let s = generate(&SynthConfig::demo(DeviceName::Wren)).unwrap();
    let onset = |label: &str| {
        s.truth
            .states
            .iter()
            .find(|x| x.label == label)
            .and_then(|x| x.b_onset_t)
            .unwrap_or_else(|| panic!("{label} not visible"))
    };
    assert!(onset("ν = 2") < onset("ν = 6"));
    assert!(onset("ν = 6") < onset("ν = 10"));
    assert!(onset("ν = 10") < onset("ν = 1"));
    assert!(onset("ν = 1") < onset("ν = 1/3"));
    let bz: Vec<_> = s
        .truth
        .states
        .iter()
        .filter(|x| x.kind == StateKind::BrownZak)
        .collect();
    assert!(bz.is_empty(), "wren has no superlattice");
}

#[test]
fn flaws_are_present_when_switched_on_and_absent_when_off() {
    let cfg = SynthConfig::demo(DeviceName::Tern);
    let s = generate(&cfg).unwrap();
    let sw = &s.sweeps;
    assert!(sw.iter().any(|x| x.direction == SweepDirection::Down));
    assert!(sw.iter().any(|x| x.direction == SweepDirection::Up));
    let log = &s.truth.flaws_applied;
    let (k, b) = log.aborted_sweep.unwrap();
    assert_eq!(sw[k].step_value, b);
    assert!(sw[k].swept.len() < cfg.gate_points);
    assert!(
        sw.iter()
            .filter(|x| x.swept.len() == cfg.gate_points)
            .count()
            >= sw.len() - 1
    );
    let (k, start, len) = log.nan_stretch.unwrap();
    assert_eq!(len, 12);
    assert!(sw[k].values[0][start..start + len]
        .iter()
        .all(|v| v.is_nan()));
    let nan_total: usize = sw
        .iter()
        .map(|x| x.values[0].iter().filter(|v| v.is_nan()).count())
        .sum();
    assert_eq!(nan_total, len);
    let rep = log.repeated_field_t.unwrap();
    assert_eq!(sw.iter().filter(|x| x.step_value == rep).count(), 2);
    let mut fields: Vec<f64> = sw.iter().map(|x| x.step_value).collect();
    fields.dedup();
    let steps: Vec<f64> = fields.windows(2).map(|w| w[1] - w[0]).collect();
    let (lo, hi) = steps
        .iter()
        .fold((f64::INFINITY, 0.0f64), |(a, b), &x| (a.min(x), b.max(x)));
    assert!(lo > 0.0 && hi / lo > 1.5, "field steps {lo}..{hi}");
    assert_eq!(log.glitches.len(), 6);
    // Gate points differ from sweep to sweep (jitter).
    assert_ne!(sw[0].swept[10], sw[2].swept[10]);

    let q = generate(&quiet(DeviceName::Tern)).unwrap();
    assert!(q.sweeps.iter().all(|x| x.direction == SweepDirection::Up));
    assert!(q.sweeps.iter().all(|x| x.swept.len() == 90));
    assert!(q
        .sweeps
        .iter()
        .all(|x| x.values.iter().flatten().all(|v| v.is_finite())));
    let st: Vec<f64> = q
        .sweeps
        .windows(2)
        .map(|w| w[1].step_value - w[0].step_value)
        .collect();
    assert!(st.iter().all(|d| (d - st[0]).abs() < 1e-12));
    assert_eq!(q.truth.flaws_applied, FlawLog::default());
    // Without flaws the sweeps are exactly the ideal model.
    let x = &q.sweeps[7];
    let (xx, xy) = q.ideal(x.swept[33], x.step_value);
    assert_eq!((x.values[0][33], x.values[1][33]), (xx, xy));
}

#[test]
fn single_flaws_act_as_described() {
    // Hysteresis: down sweeps show the model shifted by +h along the recorded gate.
    let mut c = quiet(DeviceName::Wren);
    c.flaws.hysteresis_v = Flaw::on(0.5);
    let s = generate(&c).unwrap();
    let down = s
        .sweeps
        .iter()
        .find(|x| x.direction == SweepDirection::Down)
        .unwrap();
    assert!(down.swept.windows(2).all(|w| w[1] < w[0]));
    let mut shifted = false;
    for (i, &vg) in down.swept.iter().enumerate() {
        assert_eq!(down.values[0][i], s.ideal(vg - 0.5, down.step_value).0);
        shifted |= down.values[0][i] != s.ideal(vg, down.step_value).0;
    }
    assert!(shifted);
    // Misalignment: a fraction of R_xy appears in R_xx.
    let mut c = quiet(DeviceName::Wren);
    c.flaws.misalignment_fraction = Flaw::on(0.02);
    let s = generate(&c).unwrap();
    let x = &s.sweeps[20];
    let (xx, xy) = s.ideal(x.swept[70], x.step_value);
    assert!((x.values[0][70] - (xx + 0.02 * xy)).abs() < 1e-9 * xx.abs().max(1.0));
    assert!(xy.abs() > 100.0);
    // Noise: residuals have the configured standard deviation.
    let mut c = quiet(DeviceName::Wren);
    c.noise = Noise {
        on: true,
        abs_ohm: 5.0,
        rel: 0.0,
    };
    let s = generate(&c).unwrap();
    let mut res = Vec::new();
    for x in &s.sweeps {
        for (i, &vg) in x.swept.iter().enumerate() {
            res.push(x.values[1][i] - s.ideal(vg, x.step_value).1);
        }
    }
    let sd = (res.iter().map(|r| r * r).sum::<f64>() / res.len() as f64).sqrt();
    assert!((sd / 5.0 - 1.0).abs() < 0.05, "noise σ {sd}");
}

#[test]
fn brown_zak_fields_equal_fractions_of_one_flux_quantum_per_cell() {
    let s = generate(&SynthConfig::demo(DeviceName::Tern)).unwrap();
    let t = &s.truth;
    let lambda_m = t.lambda_nm.unwrap() * 1e-9;
    let area = 0.75f64.sqrt() * lambda_m * lambda_m;
    let bz: Vec<_> = t
        .states
        .iter()
        .filter(|x| x.kind == StateKind::BrownZak)
        .collect();
    assert!(bz.len() >= 3);
    for x in bz {
        let q = x.phi_over_phi0.unwrap();
        assert_eq!(q.numer(), 1);
        // B = (1/q)·φ₀/A with φ₀ = h/e (check-values §5; pitfall §14.1: not h/2e).
        let want = PHI0_WB / area / q.denom() as f64;
        assert!(
            (x.b_t.unwrap() / want - 1.0).abs() < 1e-6,
            "{} vs {want}",
            x.b_t.unwrap()
        );
        assert_eq!(x.visible, want <= t.config.field_range_t.1);
    }
    // n₀ = 1/A and one flux per cell are consistent with λ.
    assert!((t.n0_cm2.unwrap() * 1e4 * area - 1.0).abs() < 1e-6);
    assert!((t.one_flux_field_t.unwrap() * area / PHI0_WB - 1.0).abs() < 1e-6);
}

#[test]
fn truth_json_carries_units_in_keys_and_round_trips() {
    let s = generate(&small(DeviceName::Wren, 3)).unwrap();
    let text = s.truth_json().unwrap();
    let v: serde_json::Value = serde_json::from_str(&text).unwrap();
    for key in [
        "alpha_cm2_per_V",
        "v_cnp_V",
        "lambda_nm",
        "twist_deg",
        "geometry",
        "stack",
        "seed",
        "states",
    ] {
        assert!(v.get(key).is_some(), "missing {key}");
    }
    assert!(v["n0_cm2"].is_null());
    // 285 nm SiO₂, ε_r 3.9: α = 7.562 37×10¹⁰ cm⁻² V⁻¹ (check-values §3).
    assert!((v["alpha_cm2_per_V"].as_f64().unwrap() / 7.562_37e10 - 1.0).abs() < 2e-6);
    let third = v["states"]
        .as_array()
        .unwrap()
        .iter()
        .find(|x| x["nu"] == "1/3")
        .expect("ν = 1/3 listed");
    assert_eq!(third["kind"], "fractional");
    assert_eq!(third["t"], "1/3");
    assert_eq!(third["s"], "0");
    for key in ["gap_K", "b_onset_T", "b_max_T", "visible"] {
        assert!(third.get(key).is_some(), "state lacks {key}");
    }
    let back: Truth = serde_json::from_str(&text).unwrap();
    assert_eq!(back, s.truth);
}

#[test]
fn varied_configs_differ_and_generate() {
    let a = SynthConfig::varied(DeviceName::Tern, 1);
    let b = SynthConfig::varied(DeviceName::Tern, 2);
    assert_ne!(a, b);
    assert_eq!(a, SynthConfig::varied(DeviceName::Tern, 1));
    for seed in 0..4 {
        for d in DeviceName::ALL {
            let mut c = SynthConfig::varied(d, seed);
            c.validate().unwrap();
            c.field_points = c.field_points.min(30);
            let s = generate(&c).unwrap();
            assert!(!s.sweeps.is_empty());
            // The moiré device keeps full filling inside its gate range.
            if d == DeviceName::Tern {
                let dev = Device::of(d);
                let full = dev.gate_for_density(4.0 * dev.n0_m2());
                let empty = dev.gate_for_density(-4.0 * dev.n0_m2());
                assert!(c.gate_range_v.0 < empty && c.gate_range_v.1 > full);
            }
        }
    }
}

#[test]
fn bad_configs_are_refused_with_the_field_named() {
    let mut c = SynthConfig::demo(DeviceName::Wren);
    c.gate_points = 1;
    assert!(generate(&c)
        .unwrap_err()
        .to_string()
        .contains("gate_points"));
    let mut c = SynthConfig::demo(DeviceName::Wren);
    c.field_range_t = (5.0, 1.0);
    assert!(generate(&c)
        .unwrap_err()
        .to_string()
        .contains("field_range_T"));
    let mut c = SynthConfig::demo(DeviceName::Wren);
    c.flaws.field_step_warp = Flaw::on(1.5);
    assert!(generate(&c)
        .unwrap_err()
        .to_string()
        .contains("field_step_warp"));
    assert_eq!(
        truth_path_for(Path::new("demo-data/wren.csv")),
        PathBuf::from("demo-data/wren.truth.json")
    );
}

/// A visible state shows in the map as written: in at least `MIN_RESOLVED_ROWS` of the
/// noiseless sweeps R_xx, or σ_xx = ρ_xx/(ρ_xx² + ρ_xy²) with ρ_xx = R_xx·W/L, has a sampled
/// minimum (no higher than both neighbouring samples) within one gate step of its line. The
/// moiré device's fractional states beside the insulating ν = 0 peak are the hard case: a dip
/// on the peak's steep flank changes R_xx there but makes no minimum.
#[test]
fn every_visible_state_has_a_sampled_minimum_in_the_written_sweeps() {
    for seed in [6, 8] {
        let mut c = SynthConfig::varied(DeviceName::Tern, seed);
        c.noise.on = false;
        c.flaws = Flaws::none();
        let s = generate(&c).unwrap();
        assert_eq!(s.headers, HEADERS);
        let w_over_l = s.truth.geometry.w_over_l;
        let m = &s.model;
        let mut checked = 0;
        for (j, st) in s.truth.states.iter().enumerate() {
            if !st.visible || st.t.is_none() {
                continue;
            }
            checked += 1;
            let rows = s
                .sweeps
                .iter()
                .filter(|sw| {
                    let b = sw.step_value;
                    let mut pts: Vec<(f64, f64, f64)> = sw
                        .swept
                        .iter()
                        .zip(&sw.values[0])
                        .zip(&sw.values[1])
                        .map(|((&v, &r), &h)| (v, r, h))
                        .collect();
                    pts.sort_by(|a, c| a.0.total_cmp(&c.0));
                    let dv = pts[1].0 - pts[0].0;
                    let v_line = m.device.gate_for_density(m.line_density(j, b));
                    let rxx: Vec<f64> = pts.iter().map(|p| p.1).collect();
                    let sxx: Vec<f64> = pts
                        .iter()
                        .map(|p| {
                            let rho = p.1 * w_over_l;
                            rho / (rho * rho + p.2 * p.2)
                        })
                        .collect();
                    (1..pts.len() - 1).any(|k| {
                        (pts[k].0 - v_line).abs() <= dv * (1.0 + 1e-9)
                            && [&rxx, &sxx]
                                .iter()
                                .any(|f| f[k] <= f[k - 1] && f[k] <= f[k + 1])
                    })
                })
                .count();
            assert!(
                rows >= crate::synth::truth::MIN_RESOLVED_ROWS,
                "tern {seed} {}: a sampled minimum in {rows} rows",
                st.label
            );
        }
        assert!(checked > 30, "tern {seed}: {checked} visible states");
    }
}

//! Gridding of ragged synthetic sweeps, checked against the generator's noiseless model.
//!
//! The synthetic device's `ideal(vg, b)` is the truth: a map measured with every flaw that
//! changes *where* points are (jitter, aborted sweep, repeated field, non-uniform field steps,
//! NaN stretch, glitches) but no noise must grid onto values close to the truth, never beyond a
//! sweep's ends, and the report must say what the flaws were.

use fanmark_core::io::{load_map, LoadOptions};
use fanmark_core::progress::NoProgress;
use fanmark_core::synth::{generate, write_csv, DeviceName, Flaw, SynthConfig};

fn quiet(device: DeviceName) -> SynthConfig {
    let mut c = SynthConfig::demo(device);
    c.noise.on = false;
    c.flaws.drift_ohm.on = false;
    c.flaws.misalignment_fraction.on = false;
    c.flaws.hysteresis_v.on = false;
    c
}

fn load(cfg: &SynthConfig) -> (fanmark_core::Map, fanmark_core::synth::Synthesis) {
    let syn = generate(cfg).unwrap();
    let dir = tempfile::tempdir().unwrap();
    let p = dir.path().join("m.csv");
    write_csv(&p, &syn).unwrap();
    (
        load_map(&p, &LoadOptions::default(), &NoProgress).unwrap(),
        syn,
    )
}

/// The CSV keeps 7 significant digits of the field.
fn same_field(a: f64, b: f64) -> bool {
    (a - b).abs() <= 1e-6 * a.abs().max(b.abs()) + 1e-12
}

fn percentile(mut v: Vec<f64>, q: f64) -> f64 {
    v.sort_by(f64::total_cmp);
    v[((v.len() - 1) as f64 * q) as usize]
}

#[test]
fn regular_sweeps_grid_exactly_onto_the_model() {
    let mut cfg = quiet(DeviceName::Wren);
    cfg.flaws.gate_jitter_steps.on = false;
    let (m, syn) = load(&cfg);
    let rep = m.meta.gridding.clone().unwrap();
    assert!(!rep.exact || rep.rows_merged == 0);
    let rxx = &m.channel("rxx").unwrap().data;
    let mut rel = Vec::new();
    for (r, &b) in m.y().values().iter().enumerate() {
        for (c, &vg) in m.x().values().iter().enumerate() {
            let v = rxx[[r, c]];
            if v.is_finite() {
                let (want, _) = syn.ideal(vg, b);
                rel.push(((v - want) / want).abs());
            }
        }
    }
    // The CSV holds 7 significant digits of every value, including the field (so the model is
    // evaluated at a field off by up to 5e-7 relative, which matters only on the steepest flanks);
    // a repeated field row is an average of equal sweeps. Every finite cell is the model value.
    assert!(
        percentile(rel.clone(), 0.5) < 1e-6,
        "median {}",
        percentile(rel.clone(), 0.5)
    );
    assert!(
        percentile(rel.clone(), 0.999) < 1e-3,
        "99.9 % {}",
        percentile(rel, 0.999)
    );
}

#[test]
fn jittered_sweeps_interpolate_within_the_linear_interpolation_bound() {
    let (m, syn) = load(&quiet(DeviceName::Wren));
    let rep = m.meta.gridding.clone().unwrap();
    assert!(!rep.exact);
    // The generator's nominal gate step; jitter moves points by ±5 % of it.
    let cfg = &syn.truth.config;
    let nominal = (cfg.gate_range_v.1 - cfg.gate_range_v.0) / (cfg.gate_points - 1) as f64;
    assert!(
        (rep.step - nominal).abs() < 0.01 * nominal,
        "step {} vs {nominal}",
        rep.step
    );
    let rxx = &m.channel("rxx").unwrap().data;
    // Linear interpolation between neighbours at most h apart errs by at most h²/8·max|f''|
    // (the textbook interpolation-error bound); max|f''| of the model is sampled on a fine
    // grid around each cell, with a factor 2 for what the sampling misses. At least 99.5 % of
    // cells must keep the bound.
    let h = 1.2 * nominal;
    // Injected glitches are the detector's business (tested elsewhere); a missed one would
    // spoil its neighbours here, so cells next to one are skipped.
    let glitch_at: Vec<(f64, f64)> = syn
        .truth
        .flaws_applied
        .glitches
        .iter()
        .map(|&(k, i)| (syn.sweeps[k].step_value, syn.sweeps[k].swept[i]))
        .collect();
    let (mut checked, mut outside) = (0, 0);
    for (r, &b) in m.y().values().iter().enumerate() {
        for (c, &vg) in m.x().values().iter().enumerate() {
            let v = rxx[[r, c]];
            if !v.is_finite()
                || glitch_at
                    .iter()
                    .any(|&(gb, gx)| same_field(gb, b) && (gx - vg).abs() < h)
            {
                continue;
            }
            let f = |x: f64| syn.ideal(x, b).0;
            let d = h / 8.0;
            let curvature = (-8..=8)
                .map(|k| {
                    let x = vg + k as f64 * d;
                    ((f(x + d) - 2.0 * f(x) + f(x - d)) / (d * d)).abs()
                })
                .fold(0.0, f64::max);
            let bound = 2.0 * h * h / 8.0 * curvature + 1e-6 * f(vg).abs() + 1e-9;
            if (v - f(vg)).abs() > bound {
                // The model has a few features narrower than the sampling above.
                outside += 1;
            }
            // Never an invented value: it lies within the measured values around it.
            let sweeps = syn.sweeps.iter().filter(|s| same_field(s.step_value, b));
            let (lo, hi) = sweeps
                .flat_map(|s| s.swept.iter().zip(&s.values[0]))
                .filter(|(x, _)| (**x - vg).abs() < h)
                .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, z), (_, &y)| {
                    (a.min(y), z.max(y))
                });
            assert!(
                // (7 significant digits in the file.)
                v >= lo - 1e-6 * lo.abs() && v <= hi + 1e-6 * hi.abs(),
                "B = {b} T, V_g = {vg} V: {v} outside the measured [{lo}, {hi}]"
            );
            checked += 1;
        }
    }
    assert!(
        outside * 200 < checked,
        "{outside} of {checked} cells beyond the bound"
    );
    assert!(checked > 30_000, "{checked}");
}

#[test]
fn report_names_the_flaws_and_nothing_is_extrapolated() {
    let (m, syn) = load(&quiet(DeviceName::Tern));
    let rep = m.meta.gridding.clone().unwrap();
    let log = &syn.truth.flaws_applied;
    // One field repeated → one merged row; one aborted sweep → one short sweep.
    assert!(log.repeated_field_t.is_some());
    assert_eq!(rep.rows_merged, 1);
    assert_eq!(rep.short_sweeps, 1);
    assert_eq!(rep.sweeps, syn.sweeps.len());
    assert!(
        rep.glitches >= log.glitches.len() * 8 / 10,
        "{} of {}",
        rep.glitches,
        log.glitches.len()
    );
    // Field rows keep their measured (non-uniform) values.
    assert!(!m.y().is_uniform(1e-3));
    // The aborted sweep's row is NaN past its last measured gate value.
    let (_, b_abort) = log.aborted_sweep.unwrap();
    let s = syn.sweeps.iter().find(|s| s.step_value == b_abort).unwrap();
    let (lo, hi) = s
        .swept
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), &x| {
            (a.min(x), b.max(x))
        });
    let row = m.y().nearest_index(b_abort).unwrap();
    let rxx = &m.channel("rxx").unwrap().data;
    for (c, &vg) in m.x().values().iter().enumerate() {
        if vg < lo - 1e-9 || vg > hi + 1e-9 {
            assert!(
                rxx[[row, c]].is_nan(),
                "value at {vg} V outside the sweep [{lo}, {hi}]"
            );
        }
    }
}

#[test]
fn hysteresis_estimate_recovers_the_generated_shift() {
    let mut cfg = quiet(DeviceName::Wren);
    cfg.flaws.hysteresis_v = Flaw::on(0.05);
    let (m, _) = load(&cfg);
    let h = m
        .meta
        .gridding
        .unwrap()
        .hysteresis
        .expect("alternating sweeps");
    // Down sweeps show features shifted toward larger recorded gate voltage by 50 mV.
    assert!((h.shift - 0.05).abs() < 0.015, "estimated {} V", h.shift);
}

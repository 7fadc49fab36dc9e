//! The quantitative part of `fanmark demo`: for the monolayer device a Shubnikov–de Haas and
//! Berry-phase result and an activation gap from a synthesised temperature series, for the
//! dual-gated device its (n, D) map. Each prints what it measured beside the generator's truth
//! and writes JSON and a figure into the demo folder.

use crate::figure::analysis::{activation_figure, dual_gate_figure, sdh_figure, FigureSize};
use crate::figure::{write, Format};
use crate::progress::TermProgress;
use anyhow::Context;
use fanmark_core::dualgate::filling_lines;
use fanmark_core::gaps::{self, GapOptions, StateLine};
use fanmark_core::gate::SingleGate;
use fanmark_core::index::IndexReport;
use fanmark_core::io::{load_map, write::write_atomic, LoadOptions};
use fanmark_core::map::Map;
use fanmark_core::sdh::{self, At, SdhOptions};
use fanmark_core::synth::dualgate::{generate_dual_gate, DualGateConfig};
use fanmark_core::synth::{series, DeviceName};
use fanmark_core::transform::{gates_to_density_displacement, DensityDisplacementGrid};
use fanmark_core::units::m2_to_cm2;
use fanmark_core::Rational;
use serde_json::json;
use std::path::Path;

/// Density of the demo SdH trace, m⁻² (3×10¹² cm⁻²).
pub const SDH_DENSITY_M2: f64 = 3e16;
/// Field window of the demo SdH trace, T.
pub const SDH_WINDOW_T: (f64, f64) = (4.0, 14.0);
/// Field rows of the demo temperature series over the device's 0–14 T: every 0.7 T, so the
/// gap's field (7 T) is a row and ten maps synthesise in about a second.
pub const SERIES_FIELD_POINTS: usize = 21;
/// The state whose gap the demo measures: ν = 6.
pub const GAP_FILLING: i64 = 6;

fn e12(n_m2: f64) -> f64 {
    m2_to_cm2(n_m2) / 1e12
}

/// SdH at 3×10¹² cm⁻² on the monolayer demo map with the indexer's calibration `gate`;
/// `true_gate` is the generator's, for the printed comparison. Writes `wren.sdh.json` and
/// `wren.sdh.png`.
pub fn sdh_demo(
    out: &Path,
    device: DeviceName,
    map: &Map,
    report: &IndexReport,
    true_gate: SingleGate,
) -> anyhow::Result<()> {
    let gate = report.calibration.gate();
    let res = sdh::analyse(
        map,
        At::Gate(gate.gate_for_density(SDH_DENSITY_M2)),
        &SdhOptions::for_window(SDH_WINDOW_T.0, SDH_WINDOW_T.1).with_gate(gate),
    )
    .with_context(|| format!("{device}: SdH analysis"))?;
    let used_v = match res.at {
        Some(At::Gate(v)) => v,
        _ => f64::NAN,
    };
    let true_n = true_gate.density(used_v);
    println!(
        "SdH at V_g = {used_v:.2} V, {}–{} T: B_F = {:.3} T → n = {:.4}×10¹² cm⁻² (generator: {:.4}×10¹², {:+.2} %)",
        SDH_WINDOW_T.0,
        SDH_WINDOW_T.1,
        res.frequency_t,
        e12(res.density_m2),
        e12(true_n),
        100.0 * (res.density_m2 / true_n - 1.0)
    );
    match (&res.index, &res.index_error) {
        (Some(ix), _) => {
            let h = &ix.at_spectrum_slope;
            println!(
                "  Landau index over {} minima (monolayer truth: N₀ = −0.5, Berry phase π):\n    \
                 free slope {:.2} ± {:.2} T: N₀ = {:.3} ± {:.3}, Berry phase = ({:.2} ± {:.2})π\n    \
                 slope held at B_F = {:.2} T: N₀ = {:.3} ± {:.3}, Berry phase = ({:.2} ± {:.2})π",
                ix.points.len(),
                ix.fit.slope,
                ix.fit.slope_err,
                ix.intercept,
                ix.intercept_err,
                ix.berry_phase_over_pi,
                ix.berry_phase_err_over_pi,
                h.slope_t,
                h.intercept,
                h.intercept_err,
                h.berry_phase_over_pi,
                h.berry_phase_err_over_pi
            )
        }
        (None, Some(e)) => println!("  Landau index not fitted: {e}"),
        _ => {}
    }
    let doc = json!({
        "result": res,
        "generator_density_m2": true_n,
        "generator_berry_phase_over_pi": 1.0,
    });
    write_atomic(
        &out.join(format!("{device}.sdh.json")),
        serde_json::to_string_pretty(&doc)?.as_bytes(),
    )?;
    let fig = sdh_figure(
        &res,
        &format!("{device}: Shubnikov–de Haas at 3×10^{{12}} cm^{{−2}}"),
        FigureSize::default(),
    )?;
    write(&fig, Format::Png, &out.join(format!("{device}.sdh.png")))?;
    Ok(())
}

/// The ν = 6 activation gap at 7 T from a temperature series of `device`, written to
/// `out/series/` as CSV files and loaded back like a user's files; `gate` is the indexer's
/// calibration. Writes `wren.gap.json` and `wren.gap.png`.
pub fn gap_demo(out: &Path, device: DeviceName, gate: SingleGate) -> anyhow::Result<()> {
    let mut cfg = series::series_config(device);
    cfg.field_points = SERIES_FIELD_POINTS;
    let nu = Rational::integer(GAP_FILLING);
    let s = series::temperature_series(
        &cfg,
        &series::DEMO_TEMPERATURES_K,
        &[(nu, Rational::ZERO, series::DEMO_FIELD_T)],
    )?;
    let dir = out.join("series");
    std::fs::create_dir_all(&dir)
        .with_context(|| format!("creating the output folder {}", dir.display()))?;
    let paths = series::write_series(&dir, device.as_str(), &s)?;
    let maps = paths
        .iter()
        .map(|p| load_map(p, &LoadOptions::default(), &TermProgress::new()))
        .collect::<fanmark_core::Result<Vec<Map>>>()?;
    let a = gaps::activation(
        &maps,
        StateLine::filling(nu),
        series::DEMO_FIELD_T,
        &GapOptions::with_gate(gate),
    )
    .with_context(|| format!("{device}: activation gap"))?;
    let truth = s
        .gaps
        .first()
        .map(|g| g.activation_gap_k)
        .unwrap_or(f64::NAN);
    let f = &a.arrhenius;
    println!(
        "activation gap of ν = {GAP_FILLING} at {} T from {} temperatures ({}–{} K fitted): Δ = {:.1} ± {:.1} K = {:.2} ± {:.2} meV (generator: {:.1} K, {:+.1} %)",
        a.b_t,
        f.points.len(),
        f.fit_range_k.0,
        f.fit_range_k.1,
        f.gap_k,
        f.gap_err_k,
        f.gap_mev,
        f.gap_err_mev,
        truth,
        100.0 * (f.gap_k / truth - 1.0)
    );
    let doc = json!({ "result": a, "generator": s.gaps });
    write_atomic(
        &out.join(format!("{device}.gap.json")),
        serde_json::to_string_pretty(&doc)?.as_bytes(),
    )?;
    let fig = activation_figure(
        &a,
        None,
        &format!(
            "{device}: activation gap of ν = {GAP_FILLING} at {} T",
            a.b_t
        ),
        FigureSize::default(),
    )?;
    write(&fig, Format::Png, &out.join(format!("{device}.gap.png")))?;
    Ok(())
}

/// The dual-gated demo device: its (V_t, V_b) map written and loaded back, resampled to
/// (n, D/ε₀) with the generator's gates, drawn with the constant-ν lines at its field.
/// Writes `NAME.csv`, `NAME.truth.json` and `NAME.nd.png`.
pub fn dual_gate_demo(out: &Path) -> anyhow::Result<()> {
    let syn = generate_dual_gate(&DualGateConfig::demo())?;
    let name = syn.truth.device.clone();
    let csv = out.join(format!("{name}.csv"));
    write_atomic(&csv, syn.csv_text().as_bytes())?;
    write_atomic(
        &out.join(format!("{name}.truth.json")),
        syn.truth_json()?.as_bytes(),
    )?;
    let map = load_map(&csv, &LoadOptions::default(), &TermProgress::new())?;
    let gate = syn.device.gate()?;
    let nd = gates_to_density_displacement(&map, &gate, &DensityDisplacementGrid::default())?;
    let b = syn.truth.field_t;
    let nus: Vec<Rational> = (-16..=16).map(Rational::integer).collect();
    let lines = filling_lines(&gate, &nus, b, (nd.y().min(), nd.y().max()))?;
    let channel = nd
        .channels()
        .first()
        .map(|c| c.name.clone())
        .context("the dual-gate map has no channel")?;
    let fig = dual_gate_figure(
        &nd,
        &channel,
        Some(b),
        &lines,
        &format!("{name}: R_{{xx}} over (n, D) at {b} T"),
        FigureSize::default(),
    )?;
    write(&fig, Format::Png, &out.join(format!("{name}.nd.png")))?;
    println!(
        "── {name}: {}\n(n, D) map {} × {} (n {:.2}…{:.2}×10¹² cm⁻², D/ε₀ {:.3}…{:.3} V/nm) with constant ν at {b} T",
        syn.truth.stack,
        nd.x().len(),
        nd.y().len(),
        e12(nd.x().min()),
        e12(nd.x().max()),
        nd.y().min() * 1e-9,
        nd.y().max() * 1e-9
    );
    Ok(())
}

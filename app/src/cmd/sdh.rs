//! `fanmark sdh`: Shubnikov–de Haas frequency, density and Landau-index (Berry-phase) fit of the
//! R_xx trace at a fixed gate voltage or density. Table on stdout; JSON with `--json`; the
//! three-panel figure with `--figure`.

use super::figure_out::{file_title, FigureOut};
use super::load_args::LoadArgs;
use crate::figure::analysis::sdh_figure;
use crate::progress::TermProgress;
use anyhow::{bail, Context, Result};
use fanmark_core::gate::SingleGate;
use fanmark_core::io::{load_map, write::write_atomic};
use fanmark_core::sdh::{self, At, Background, SdhOptions, Window};
use fanmark_core::transform::gate_to_density;
use fanmark_core::units::{cm2_to_m2, m2_to_cm2};
use fanmark_core::Quantity;
use std::path::PathBuf;

/// Arguments of `fanmark sdh`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Data file (a map over gate voltage or density and field).
    pub file: PathBuf,
    /// Take the trace at this gate voltage, V.
    #[arg(long, conflicts_with = "at_density")]
    pub at_gate: Option<f64>,
    /// Take the trace at this density, in 10¹² cm⁻² (needs a density axis or --alpha-cm2-per-v).
    #[arg(long)]
    pub at_density: Option<f64>,
    /// Lowest field of the window, T.
    #[arg(long, default_value_t = 1.0)]
    pub b_min: f64,
    /// Highest field of the window, T.
    #[arg(long)]
    pub b_max: f64,
    /// Landau-level degeneracy g in n = g e B_F / h.
    #[arg(long, default_value_t = 4.0)]
    pub degeneracy: f64,
    /// Window: rect, hann, hamming, blackman.
    #[arg(long, default_value = "hann")]
    pub window: String,
    /// Degree of the polynomial background in 1/B, or `none`.
    #[arg(long, default_value = "3")]
    pub background: String,
    /// Gate lever arm α in cm⁻² V⁻¹ (calibrated density; needed for --at-density on a gate map).
    #[arg(long)]
    pub alpha_cm2_per_v: Option<f64>,
    /// Charge-neutrality gate voltage, V.
    #[arg(long, default_value_t = 0.0)]
    pub v_cnp: f64,
    /// Print the full result as JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Also write the full result as JSON to this file.
    #[arg(long, value_name = "FILE")]
    pub out_json: Option<PathBuf>,
    /// The figure.
    #[command(flatten)]
    pub figure: FigureOut,
    /// How to read the file.
    #[command(flatten)]
    pub load: LoadArgs,
}

/// Run `fanmark sdh`.
pub fn run(args: Args) -> Result<()> {
    args.figure.check()?;
    let map = load_map(&args.file, &args.load.options()?, &TermProgress::new())?;
    let gate = args.alpha_cm2_per_v.map(|a| SingleGate {
        alpha_m2_per_v: cm2_to_m2(a),
        v_cnp: args.v_cnp,
    });
    let mut opts = SdhOptions::for_window(args.b_min, args.b_max);
    opts.degeneracy = args.degeneracy;
    opts.window = Window::parse(&args.window)?;
    opts.background = match args.background.as_str() {
        "none" => Background::None,
        d => Background::Polynomial {
            degree: d
                .parse()
                .with_context(|| format!("--background `{d}`: expected a degree or `none`"))?,
        },
    };
    opts.gate = gate;
    let res = match (args.at_gate, args.at_density) {
        (Some(v), None) => sdh::analyse(&map, At::Gate(v), &opts),
        (None, Some(n)) => {
            let n = cm2_to_m2(n * 1e12);
            if map.axis_of(Quantity::Density).is_some() {
                sdh::analyse(&map, At::Density(n), &opts)
            } else {
                let g =
                    gate.context("--at-density on a gate-voltage map needs --alpha-cm2-per-v")?;
                sdh::analyse(&gate_to_density(&map, &g)?, At::Density(n), &opts)
            }
        }
        _ => bail!("give exactly one of --at-gate V or --at-density N"),
    }
    .with_context(|| format!("SdH analysis of {}", args.file.display()))?;
    let json = serde_json::to_string_pretty(&res)?;
    if let Some(p) = &args.out_json {
        write_atomic(p, json.as_bytes())?;
    }
    let name = file_title(&args.file);
    args.figure
        .write_with(|size| sdh_figure(&res, &format!("{name}: Shubnikov–de Haas"), size))?;
    if args.json {
        println!("{json}");
        return Ok(());
    }
    println!("Shubnikov–de Haas, {}", args.file.display());
    println!(
        "  window {}–{} T, {} points in 1/B, {:?} window, g = {}",
        args.b_min,
        args.b_max,
        res.trace.inv_b.len(),
        res.options.window,
        res.options.degeneracy
    );
    println!(
        "  B_F = {:.4} T   n = g·e·B_F/h = {:.5}×10¹² cm⁻²   ({:.1} oscillations)",
        res.frequency_t,
        m2_to_cm2(res.density_m2) / 1e12,
        res.oscillations
    );
    if let (Some(nc), Some(mis)) = (res.calibrated_density_m2, res.density_mismatch) {
        println!(
            "  calibrated n = {:.5}×10¹² cm⁻²   mismatch {:+.2} %",
            m2_to_cm2(nc) / 1e12,
            100.0 * mis
        );
    }
    println!("  peak   B (T)      amplitude (Ω)  harmonic");
    for (i, p) in res.peaks.iter().enumerate() {
        println!(
            "  {:>4}   {:<10.4} {:<14.4} {}",
            i + 1,
            p.frequency_t,
            p.amplitude_ohm,
            p.harmonic
        );
    }
    match (&res.index, &res.index_error) {
        (Some(ix), _) => {
            println!("  Landau index: {}", ix.convention);
            println!("    N    B_N (T)    1/B_N (1/T)");
            for p in &ix.points {
                println!("    {:<4} {:<10.4} {:.5}", p.index, p.b_t, p.inv_b);
            }
            println!(
                "  intercept N0 = {:.3} ± {:.3}   Berry phase = ({:.2} ± {:.2})π   slope B_F = {:.4} T",
                ix.intercept,
                ix.intercept_err,
                ix.berry_phase_over_pi,
                ix.berry_phase_err_over_pi,
                ix.frequency_from_slope_t
            );
            let h = &ix.at_spectrum_slope;
            println!(
                "  slope held at B_F = {:.4} T: N0 = {:.3} ± {:.3}   Berry phase = ({:.2} ± {:.2})π",
                h.slope_t,
                h.intercept,
                h.intercept_err,
                h.berry_phase_over_pi,
                h.berry_phase_err_over_pi
            );
        }
        (None, Some(e)) => println!("  Landau index: not fitted: {e}"),
        _ => {}
    }
    Ok(())
}

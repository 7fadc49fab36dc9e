//! `fanmark dualgate`: resample a (V_t, V_b) map at fixed field onto (n, D/ε₀) with the two-gate
//! model, write it as long CSV, and a JSON summary with the constant-ν lines at the field and
//! optional line cuts; the (n, D) figure with the constant-ν lines with `--figure`.

use super::figure_out::{file_title, FigureOut};
use super::load_args::LoadArgs;
use crate::figure::analysis::dual_gate_figure;
use crate::progress::TermProgress;
use anyhow::Result;
use fanmark_core::dualgate::{filling_lines, line_cut, CutAt};
use fanmark_core::gate::DualGate;
use fanmark_core::io::{load_map, write::long_csv_text, write::write_atomic};
use fanmark_core::map::{RawSweep, SweepDirection};
use fanmark_core::transform::{gates_to_density_displacement, DensityDisplacementGrid};
use fanmark_core::units::cm2_to_m2;
use fanmark_core::Rational;
use serde_json::json;
use std::path::PathBuf;

/// Arguments of `fanmark dualgate`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Map over top- and bottom-gate voltage (e.g. columns vt_V, vb_V, rxx_ohm).
    pub file: PathBuf,
    /// Top-gate capacitance per area, F/m².
    #[arg(long)]
    pub ct: f64,
    /// Bottom-gate capacitance per area, F/m².
    #[arg(long)]
    pub cb: f64,
    /// Top-gate offset V_t0, V.
    #[arg(long, default_value_t = 0.0)]
    pub vt0: f64,
    /// Bottom-gate offset V_b0, V.
    #[arg(long, default_value_t = 0.0)]
    pub vb0: f64,
    /// Field of the map, T (for the constant-ν lines).
    #[arg(long)]
    pub b: Option<f64>,
    /// Largest |ν| of the integer lines listed.
    #[arg(long, default_value_t = 12)]
    pub nu_max: i64,
    /// Line cut at this density, 10¹² cm⁻² (repeatable).
    #[arg(long = "cut-n")]
    pub cut_n: Vec<f64>,
    /// Line cut at this D/ε₀, V/nm (repeatable).
    #[arg(long = "cut-d")]
    pub cut_d: Vec<f64>,
    /// Resampled map output (long CSV: n_cm2, D_V_per_nm, channels).
    #[arg(long, default_value = "dualgate-nd.csv")]
    pub out: PathBuf,
    /// JSON summary output.
    #[arg(long, default_value = "dualgate-nd.json")]
    pub summary: PathBuf,
    /// The figure of the (n, D) map (first channel) with the constant-ν lines of --b.
    #[command(flatten)]
    pub figure: FigureOut,
    /// How to read the file.
    #[command(flatten)]
    pub load: LoadArgs,
}

/// Run `fanmark dualgate`.
pub fn run(args: Args) -> Result<()> {
    args.figure.check()?;
    let map = load_map(&args.file, &args.load.options()?, &TermProgress::new())?;
    let mut gate = DualGate::new(args.ct, args.cb)?;
    gate.v_top_offset = args.vt0;
    gate.v_bottom_offset = args.vb0;
    let nd = gates_to_density_displacement(&map, &gate, &DensityDisplacementGrid::default())?;
    let sweeps: Vec<RawSweep> = nd
        .y()
        .values()
        .iter()
        .enumerate()
        .map(|(r, &d)| RawSweep {
            step_value: d,
            direction: SweepDirection::Up,
            first_line: 0,
            swept: nd.x().values().to_vec(),
            values: nd
                .channels()
                .iter()
                .map(|c| c.data.row(r).to_vec())
                .collect(),
        })
        .collect();
    let mut headers = vec!["n_cm2".to_string(), "D_V_per_nm".to_string()];
    headers.extend(nd.channels().iter().map(|c| c.name.clone()));
    let h: Vec<&str> = headers.iter().map(|s| s.as_str()).collect();
    let mut scale = vec![1e4, 1e9];
    scale.extend(std::iter::repeat_n(1.0, nd.channels().len()));
    write_atomic(&args.out, long_csv_text(&h, &scale, &sweeps, 7).as_bytes())?;
    let channel = nd
        .channels()
        .first()
        .map(|c| c.name.clone())
        .unwrap_or_default();
    let mut cuts = Vec::new();
    for &n in &args.cut_n {
        cuts.push(line_cut(
            &nd,
            &channel,
            CutAt::Density(cm2_to_m2(n * 1e12)),
        )?);
    }
    for &d in &args.cut_d {
        cuts.push(line_cut(&nd, &channel, CutAt::Displacement(d * 1e9))?);
    }
    let lines = match args.b {
        Some(b) => {
            let nus: Vec<Rational> = (-args.nu_max..=args.nu_max)
                .map(Rational::integer)
                .collect();
            filling_lines(&gate, &nus, b, (nd.y().min(), nd.y().max()))?
                .into_iter()
                .filter(|l| l.density_m2 >= nd.x().min() && l.density_m2 <= nd.x().max())
                .collect()
        }
        None => Vec::new(),
    };
    args.figure.write_with(|size| {
        dual_gate_figure(
            &nd,
            &channel,
            args.b,
            &lines,
            &format!("{}: (n, D) map", file_title(&args.file)),
            size,
        )
    })?;
    let summary = json!({
        "source": args.file.display().to_string(),
        "gate": gate,
        "convention": "n = (C_t(V_t−V_t0) + C_b(V_b−V_b0))/e; D/ε₀ = (C_t(V_t−V_t0) − C_b(V_b−V_b0))/(2ε₀), positive when the top gate dominates",
        "grid": { "n_points": nd.x().len(), "d_points": nd.y().len(),
                  "n_range_cm2": [nd.x().min() / 1e4, nd.x().max() / 1e4],
                  "d_range_V_per_nm": [nd.y().min() * 1e-9, nd.y().max() * 1e-9] },
        "field_T": args.b,
        "filling_lines": lines,
        "cuts": cuts,
        "resampled_csv": args.out.display().to_string(),
    });
    write_atomic(
        &args.summary,
        serde_json::to_string_pretty(&summary)?.as_bytes(),
    )?;
    println!(
        "(n, D) map {} × {} written to {}; summary with {} ν lines and {} cuts in {}",
        nd.x().len(),
        nd.y().len(),
        args.out.display(),
        lines.len(),
        cuts.len(),
        args.summary.display()
    );
    Ok(())
}

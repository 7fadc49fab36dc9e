//! `fanmark index FILE`: calibrate (unless a calibration is given), find and index every gap,
//! print the states by strength, and write JSON/CSV.

use super::load_args::LoadArgs;
use anyhow::Context;
use fanmark_core::index::calibrate::Calibration;
use fanmark_core::index::stack::Stack;
use fanmark_core::index::{index_map, IndexOptions, IndexReport};
use fanmark_core::io::{load_map, write::write_atomic};
use fanmark_core::progress::NoProgress;
use std::fmt::Write as _;
use std::path::PathBuf;

/// Arguments of `fanmark index`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Data file.
    pub file: PathBuf,
    /// Calibration JSON written by `fanmark calibrate --json`.
    #[arg(long, value_name = "FILE")]
    pub calibration: Option<PathBuf>,
    /// Device stack: monolayer, bilayer or monolayer-moire.
    #[arg(long, default_value = "monolayer")]
    pub stack: String,
    /// Write the full report as JSON.
    #[arg(long, value_name = "OUT")]
    pub json: Option<PathBuf>,
    /// Write the states as CSV.
    #[arg(long, value_name = "OUT")]
    pub csv: Option<PathBuf>,
    #[command(flatten)]
    pub load: LoadArgs,
}

/// Run `fanmark index`.
pub fn run(a: Args) -> anyhow::Result<()> {
    let stack: Stack = a.stack.parse()?;
    let map = load_map(&a.file, &a.load.options()?, &NoProgress)?;
    let mut opts = IndexOptions::new(stack);
    if let Some(p) = &a.calibration {
        let text =
            std::fs::read_to_string(p).with_context(|| format!("reading {}", p.display()))?;
        let cal: Calibration = serde_json::from_str(&text)
            .with_context(|| format!("{}: not a calibration JSON", p.display()))?;
        opts.calibration = Some(cal);
    }
    let r = index_map(&map, &opts)?;
    let c = &r.calibration;
    println!(
        "calibration ({:?}): α = {:.5e} ± {:.1e} cm⁻² V⁻¹, V_CNP = {:.4} ± {:.4} V",
        c.method, c.alpha_cm2_per_v, c.alpha_sigma_cm2_per_v, c.v_cnp_v, c.v_cnp_sigma_v
    );
    for n in &c.notes {
        println!("note: {n}");
    }
    if let Some(m) = &r.moire {
        println!(
            "moiré: n₀ = {:.4e} ± {:.1e} cm⁻², λ = {:.3} nm, twist {}",
            m.n0_cm2,
            m.n0_sigma_cm2,
            m.lambda_nm,
            m.twist_deg.map_or("—".into(), |t| format!("{t:.3}°"))
        );
    }
    println!(
        "{:<16} {:>7} {:>7} {:>8} {:>7} {:>8} {:>8} {:>12}",
        "kind", "t", "s", "score", "t-stat", "onset T", "max T", "Hall"
    );
    for s in &r.states {
        let hall = s
            .hall_check
            .as_ref()
            .map_or("—".to_string(), |h| h.verdict.clone());
        println!(
            "{:<16} {:>7} {:>7} {:>8.1} {:>7.1} {:>8.2} {:>8.2} {:>12}",
            format!("{:?}", s.kind),
            s.t.to_string(),
            s.s.to_string(),
            s.score,
            s.t_stat,
            s.b_onset_t.unwrap_or(f64::NAN),
            s.b_max_t.unwrap_or(f64::NAN),
            hall
        );
    }
    if let Some(out) = a.json {
        write_atomic(&out, serde_json::to_string_pretty(&r)?.as_bytes())?;
    }
    if let Some(out) = a.csv {
        write_atomic(&out, states_csv(&r).as_bytes())?;
    }
    Ok(())
}

/// The states of a report as CSV, one row per state, strongest first.
pub fn states_csv(r: &IndexReport) -> String {
    let mut csv = String::from(
        "kind,t,s,nu,score,t_stat,b_onset_T,b_max_T,hall_sigma_xy_e2h,hall_verdict,flags\n",
    );
    for s in &r.states {
        let _ = writeln!(
            csv,
            "{:?},{},{},{},{:.4},{:.3},{},{},{},{},{}",
            s.kind,
            s.t,
            s.s,
            s.nu.map(|n| n.to_string()).unwrap_or_default(),
            s.score,
            s.t_stat,
            s.b_onset_t.map(|v| v.to_string()).unwrap_or_default(),
            s.b_max_t.map(|v| v.to_string()).unwrap_or_default(),
            s.hall_check
                .as_ref()
                .map(|h| h.sigma_xy_e2h.to_string())
                .unwrap_or_default(),
            s.hall_check
                .as_ref()
                .map(|h| h.verdict.clone())
                .unwrap_or_default(),
            s.flags.join(";")
        );
    }
    csv
}

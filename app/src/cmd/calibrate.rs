//! `fanmark calibrate FILE`: the gate calibration from the data, every method side by side.

use super::load_args::LoadArgs;
use anyhow::Context;
use fanmark_core::gate::Dielectric;
use fanmark_core::index::calibrate::calibrate_map;
use fanmark_core::index::features::{find_minima, gap_map, GapMapOptions};
use fanmark_core::index::stack::Stack;
use fanmark_core::io::{load_map, write::write_atomic};
use fanmark_core::progress::NoProgress;
use std::path::PathBuf;

/// Arguments of `fanmark calibrate`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Data file (R_xx, optionally R_xy, over gate voltage and field).
    pub file: PathBuf,
    /// Device stack: monolayer, bilayer or monolayer-moire.
    #[arg(long, default_value = "monolayer")]
    pub stack: String,
    /// Gate dielectric thickness in nm (with --epsilon-r) for the geometric lever arm.
    #[arg(long, value_name = "NM")]
    pub dielectric_nm: Option<f64>,
    /// Relative permittivity of the gate dielectric.
    #[arg(long, value_name = "EPS", default_value_t = 3.9)]
    pub epsilon_r: f64,
    /// Write the chosen calibration (JSON) here.
    #[arg(long, value_name = "OUT")]
    pub json: Option<PathBuf>,
    #[command(flatten)]
    pub load: LoadArgs,
}

/// Run `fanmark calibrate`.
pub fn run(a: Args) -> anyhow::Result<()> {
    let stack: Stack = a.stack.parse()?;
    let map = load_map(&a.file, &a.load.options()?, &NoProgress)?;
    let gap = gap_map(&map, &GapMapOptions::default())?;
    let minima = find_minima(&map, &gap, 3.0);
    let diel = a.dielectric_nm.map(|d| Dielectric {
        thickness_m: d * 1e-9,
        epsilon_r: a.epsilon_r,
    });
    let cal = calibrate_map(&map, &minima, stack, diel.as_ref())?;
    println!(
        "{:<14} {:>22} {:>18} {:>7}",
        "method", "α (cm⁻² V⁻¹)", "V_CNP (V)", "points"
    );
    for e in &cal.methods {
        let v = match (e.v_cnp_v, e.v_cnp_sigma_v) {
            (Some(v), Some(s)) => format!("{v:.4} ± {s:.4}"),
            _ => "—".into(),
        };
        println!(
            "{:<14} {:>22} {:>18} {:>7}",
            format!("{:?}", e.method),
            format!(
                "{:.5e} ± {:.1e}",
                e.alpha_cm2_per_v, e.alpha_sigma_cm2_per_v
            ),
            v,
            e.points
        );
    }
    println!("chosen: {:?}", cal.method);
    for n in &cal.notes {
        println!("note: {n}");
    }
    if let Some(out) = a.json {
        let text = serde_json::to_string_pretty(&cal)?;
        write_atomic(&out, text.as_bytes())
            .with_context(|| format!("writing {}", out.display()))?;
    }
    Ok(())
}

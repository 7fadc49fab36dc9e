//! `fanmark synth`: write a synthetic device's map (long-format CSV) and its truth (JSON).

use anyhow::{bail, Context};
use fanmark_core::synth::{self, DeviceName, SynthConfig};
use std::path::PathBuf;

/// Arguments of `fanmark synth`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Device to synthesise: `wren` (graphene on SiO₂) or `tern` (graphene aligned to hBN).
    #[arg(long)]
    pub device: String,
    /// Output CSV file; the truth goes beside it as STEM.truth.json.
    #[arg(long)]
    pub out: PathBuf,
    /// Seed of every random choice (default: the demo seed of the device).
    #[arg(long)]
    pub seed: Option<u64>,
    /// Map size as GATExFIELD points, e.g. 400x120.
    #[arg(long, value_name = "GxB")]
    pub size: Option<String>,
    /// Draw noise, disorder, ranges and flaws at random from the seed.
    #[arg(long, conflicts_with = "demo")]
    pub varied: bool,
    /// Exactly the committed demo measurement (no other option may change it).
    #[arg(long, conflicts_with_all = ["seed", "size"])]
    pub demo: bool,
}

/// Parse `GxB` (e.g. `400x120`) into gate and field point counts.
fn parse_size(text: &str) -> anyhow::Result<(usize, usize)> {
    let lower = text.to_ascii_lowercase();
    let Some((g, b)) = lower.split_once(['x', '×']) else {
        bail!("--size `{text}`: expected GATExFIELD points, e.g. 400x120");
    };
    let g: usize = g
        .trim()
        .parse()
        .with_context(|| format!("--size `{text}`: gate points `{g}` is not a whole number"))?;
    let b: usize = b
        .trim()
        .parse()
        .with_context(|| format!("--size `{text}`: field points `{b}` is not a whole number"))?;
    Ok((g, b))
}

/// Run `fanmark synth`.
pub fn run(args: Args) -> anyhow::Result<()> {
    let device: DeviceName = args.device.parse()?;
    let mut cfg = if args.varied {
        SynthConfig::varied(device, args.seed.unwrap_or(1))
    } else {
        SynthConfig::demo(device)
    };
    if let Some(seed) = args.seed {
        cfg.seed = seed;
    }
    if let Some(size) = &args.size {
        (cfg.gate_points, cfg.field_points) = parse_size(size)?;
    }
    let synthesis = synth::generate(&cfg)?;
    let truth_path = synth::truth_path_for(&args.out);
    synth::write_csv(&args.out, &synthesis)?;
    synth::write_truth(&truth_path, &synthesis)?;
    let points: usize = synthesis.sweeps.iter().map(|s| s.swept.len()).sum();
    let visible = synthesis.truth.states.iter().filter(|s| s.visible).count();
    println!(
        "wrote {} ({points} points in {} sweeps of device {device}, seed {}) and {} ({} states, {visible} visible)",
        args.out.display(),
        synthesis.sweeps.len(),
        cfg.seed,
        truth_path.display(),
        synthesis.truth.states.len(),
    );
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn sizes_parse_or_fail_clearly() {
        assert_eq!(parse_size("400x120").unwrap(), (400, 120));
        assert_eq!(parse_size("40X12").unwrap(), (40, 12));
        let e = parse_size("400").unwrap_err().to_string();
        assert!(e.contains("GATExFIELD"), "{e}");
        assert!(parse_size("ax3").is_err());
    }
}

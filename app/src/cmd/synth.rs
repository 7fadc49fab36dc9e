//! `fanmark synth`: write a synthetic device's map (long-format CSV) and its truth (JSON); a
//! temperature series of it (one CSV per temperature with a `T_K` column, and the activation
//! gaps of chosen states) with `--temperatures`; or the dual-gate device's (V_t, V_b) map.

use anyhow::{bail, Context};
use fanmark_core::io::write::write_atomic;
use fanmark_core::synth::dualgate::{generate_dual_gate, DualGateConfig};
use fanmark_core::synth::{self, series, DeviceName, SynthConfig};
use fanmark_core::Rational;
use std::path::{Path, PathBuf};

/// Name of the dual-gated synthetic device (a (V_t, V_b) map at fixed field).
pub const DUAL_GATE_DEVICE: &str = "dunlin";

/// Arguments of `fanmark synth`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Device to synthesise: `wren` (graphene on SiO₂), `tern` (graphene aligned to hBN) or
    /// `dunlin` (a dual-gated bilayer measured over top and bottom gate at fixed field).
    #[arg(long)]
    pub device: String,
    /// Output CSV file; the truth goes beside it as STEM.truth.json. With --temperatures, one
    /// file STEM-{T}K.csv per temperature and STEM.gaps.json.
    #[arg(long)]
    pub out: PathBuf,
    /// Write a temperature series at these temperatures, K (e.g. 25,40,65,100,170); `demo`
    /// for the demo series of 25–240 K.
    #[arg(long, value_name = "T1,T2,…|demo", conflicts_with_all = ["varied", "demo"])]
    pub temperatures: Option<String>,
    /// A state whose activation gap the series records, as `t,s,B` (B in T); repeatable.
    /// Default: ν = 6 at 7 T.
    #[arg(long, value_name = "t,s,B", requires = "temperatures")]
    pub gap_of: Vec<String>,
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

/// Parse the temperature list (`demo` or comma-separated K, each > 0).
fn parse_temperatures(text: &str) -> anyhow::Result<Vec<f64>> {
    if text.trim() == "demo" {
        return Ok(series::DEMO_TEMPERATURES_K.to_vec());
    }
    let t = text
        .split(',')
        .map(|v| {
            let x: f64 = v.trim().parse().with_context(|| {
                format!("--temperatures `{text}`: `{v}` is not a number of kelvin")
            })?;
            if !(x > 0.0 && x.is_finite()) {
                bail!("--temperatures `{text}`: {x} K is not a positive temperature");
            }
            Ok(x)
        })
        .collect::<anyhow::Result<Vec<f64>>>()?;
    if t.len() < 2 {
        bail!("--temperatures `{text}`: a series needs at least two temperatures");
    }
    Ok(t)
}

/// Parse one `t,s,B` probe.
fn parse_probe(text: &str) -> anyhow::Result<(Rational, Rational, f64)> {
    let v: Vec<&str> = text.split(',').map(str::trim).collect();
    if v.len() != 3 {
        bail!("--gap-of `{text}`: expected `t,s,B`, e.g. `6,0,7`");
    }
    let t = v[0]
        .parse::<Rational>()
        .with_context(|| format!("--gap-of `{text}`: t"))?;
    let s = v[1]
        .parse::<Rational>()
        .with_context(|| format!("--gap-of `{text}`: s"))?;
    let b: f64 = v[2]
        .parse()
        .with_context(|| format!("--gap-of `{text}`: `{}` is not a field in T", v[2]))?;
    Ok((t, s, b))
}

/// The folder and file stem of the series files from `--out` (its extension dropped).
fn series_place(out: &Path) -> anyhow::Result<(PathBuf, String)> {
    let stem = out
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .filter(|s| !s.is_empty())
        .with_context(|| format!("--out {}: needs a file name", out.display()))?;
    let dir = out
        .parent()
        .map(Path::to_path_buf)
        .filter(|p| !p.as_os_str().is_empty())
        .unwrap_or_else(|| PathBuf::from("."));
    Ok((dir, stem))
}

/// Write the dual-gate device's map and truth.
fn run_dual_gate(args: &Args) -> anyhow::Result<()> {
    if args.varied || args.temperatures.is_some() {
        bail!("--varied and --temperatures apply to wren and tern, not to {DUAL_GATE_DEVICE}");
    }
    let mut cfg = DualGateConfig::demo();
    if let Some(seed) = args.seed {
        cfg.seed = seed;
    }
    if let Some(size) = &args.size {
        (cfg.vt_points, cfg.vb_points) = parse_size(size)?;
    }
    let syn = generate_dual_gate(&cfg)?;
    let truth_path = synth::truth_path_for(&args.out);
    write_atomic(&args.out, syn.csv_text().as_bytes())?;
    write_atomic(&truth_path, syn.truth_json()?.as_bytes())?;
    let t = &syn.truth;
    println!(
        "wrote {} ({} × {} points over (V_t, V_b) at {} T, seed {}) and {}",
        args.out.display(),
        cfg.vt_points,
        cfg.vb_points,
        t.field_t,
        cfg.seed,
        truth_path.display()
    );
    println!(
        "resample it with: fanmark dualgate {} --ct {:e} --cb {:e} --vt0 {} --vb0 {} --b {}",
        args.out.display(),
        t.c_top,
        t.c_bottom,
        t.v_top_offset,
        t.v_bottom_offset,
        t.field_t
    );
    Ok(())
}

/// Write a temperature series of `cfg`.
fn run_series(args: &Args, cfg: &SynthConfig, temps: &str) -> anyhow::Result<()> {
    let temperatures = parse_temperatures(temps)?;
    let probes = if args.gap_of.is_empty() {
        vec![(Rational::integer(6), Rational::ZERO, series::DEMO_FIELD_T)]
    } else {
        args.gap_of
            .iter()
            .map(|p| parse_probe(p))
            .collect::<anyhow::Result<Vec<_>>>()?
    };
    let mut base = series::series_config(cfg.device);
    base.seed = cfg.seed;
    (base.gate_points, base.field_points) = (cfg.gate_points, cfg.field_points);
    let s = series::temperature_series(&base, &temperatures, &probes)?;
    let (dir, stem) = series_place(&args.out)?;
    std::fs::create_dir_all(&dir)
        .with_context(|| format!("creating the output folder {}", dir.display()))?;
    let paths = series::write_series(&dir, &stem, &s)?;
    println!(
        "wrote {} maps of device {} ({}–{} K) to {}/{stem}-*K.csv and the gaps to {}",
        paths.len(),
        cfg.device,
        temperatures.iter().cloned().fold(f64::INFINITY, f64::min),
        temperatures.iter().cloned().fold(0.0, f64::max),
        dir.display(),
        dir.join(format!("{stem}.gaps.json")).display()
    );
    for g in &s.gaps {
        println!(
            "  (t, s) = ({}, {}) at {} T: activation gap {:.1} K",
            g.t, g.s, g.b_t, g.activation_gap_k
        );
    }
    Ok(())
}

/// Run `fanmark synth`.
pub fn run(args: Args) -> anyhow::Result<()> {
    if args.device.trim().eq_ignore_ascii_case(DUAL_GATE_DEVICE) {
        return run_dual_gate(&args);
    }
    let device: DeviceName = args
        .device
        .parse()
        .with_context(|| format!("(`{DUAL_GATE_DEVICE}` is the dual-gated device)"))?;
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
    if let Some(t) = &args.temperatures {
        return run_series(&args, &cfg, t);
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

    #[test]
    fn temperature_lists_and_probes_parse_or_fail_clearly() {
        assert_eq!(parse_temperatures("25, 40,65").unwrap(), [25.0, 40.0, 65.0]);
        assert_eq!(
            parse_temperatures("demo").unwrap(),
            series::DEMO_TEMPERATURES_K.to_vec()
        );
        let e = parse_temperatures("25").unwrap_err().to_string();
        assert!(e.contains("at least two"), "{e}");
        let e = parse_temperatures("25,-3").unwrap_err().to_string();
        assert!(e.contains("positive"), "{e}");
        let (t, s, b) = parse_probe("2/3, 1/3, 9.5").unwrap();
        assert_eq!(
            (t, s, b),
            (
                Rational::new(2, 3).unwrap(),
                Rational::new(1, 3).unwrap(),
                9.5
            )
        );
        assert!(parse_probe("6,0")
            .unwrap_err()
            .to_string()
            .contains("t,s,B"));
        let (dir, stem) = series_place(Path::new("out/wren.csv")).unwrap();
        assert_eq!((dir, stem.as_str()), (PathBuf::from("out"), "wren"));
    }
}

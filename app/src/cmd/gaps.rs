//! `fanmark gaps`: activation gap of a state from maps at several temperatures,
//! R_xx = R₀ exp(−Δ/(2k_BT)) (factor 2 included), at one field or over a field range; the
//! Arrhenius figure (and the gap against field) with `--figure`.

use super::figure_out::FigureOut;
use super::load_args::LoadArgs;
use crate::figure::analysis::activation_figure;
use crate::progress::TermProgress;
use anyhow::{bail, Context, Result};
use fanmark_core::gaps::{self, ActivatedRange, GapOptions, StateLine, ARRHENIUS_CONVENTION};
use fanmark_core::gate::SingleGate;
use fanmark_core::io::{load_map, write::write_atomic};
use fanmark_core::units::cm2_to_m2;
use fanmark_core::Rational;
use std::path::PathBuf;

/// Arguments of `fanmark gaps`.
#[derive(clap::Args, Debug)]
#[command(allow_negative_numbers = true)]
pub struct Args {
    /// Maps at different temperatures.
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// The state as `t,s` (rationals, e.g. `2,0` or `2/3,1/3`).
    #[arg(long, conflicts_with = "nu")]
    pub state: Option<String>,
    /// The constant-filling state ν = p/q.
    #[arg(long)]
    pub nu: Option<String>,
    /// Field, T.
    #[arg(long, conflicts_with = "b_range")]
    pub at_b: Option<f64>,
    /// Field range `lo,hi` in T: the gap at every field row inside.
    #[arg(long)]
    pub b_range: Option<String>,
    /// Temperatures in K, one per file in order (otherwise from each file).
    #[arg(long, value_delimiter = ',')]
    pub temperatures: Option<Vec<f64>>,
    /// Fit only temperatures in `lo,hi` K (otherwise chosen by linearity).
    #[arg(long)]
    pub t_range: Option<String>,
    /// Gate lever arm α in cm⁻² V⁻¹ (maps over gate voltage).
    #[arg(long)]
    pub alpha_cm2_per_v: Option<f64>,
    /// Charge-neutrality gate voltage, V.
    #[arg(long, default_value_t = 0.0)]
    pub v_cnp: f64,
    /// n₀ = 1/A in cm⁻² for states with s ≠ 0.
    #[arg(long)]
    pub n0_cm2: Option<f64>,
    /// Print JSON instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Also write JSON to this file.
    #[arg(long, value_name = "FILE")]
    pub out_json: Option<PathBuf>,
    /// The figure: the Arrhenius plot (at the field nearest the range's middle with
    /// --b-range, with the gap against field below).
    #[command(flatten)]
    pub figure: FigureOut,
    /// How to read the files.
    #[command(flatten)]
    pub load: LoadArgs,
}

fn pair(text: &str, what: &str) -> Result<(f64, f64)> {
    let v: Vec<&str> = text.split(',').collect();
    if v.len() != 2 {
        bail!("{what} `{text}`: expected `lo,hi`");
    }
    let p = |s: &str| -> Result<f64> {
        s.trim()
            .parse()
            .with_context(|| format!("{what} `{text}`: `{s}` is not a number"))
    };
    Ok((p(v[0])?, p(v[1])?))
}

/// The state in a figure title: `ν = p/q` for s = 0, else `(t, s) = (…, …)`.
fn state_title(state: StateLine) -> String {
    let t = fanmark_core::line::signed_text;
    if state.s.is_zero() {
        format!("ν = {}", t(state.t))
    } else {
        format!("(t, s) = ({}, {})", t(state.t), t(state.s))
    }
}

/// Run `fanmark gaps`.
pub fn run(args: Args) -> Result<()> {
    let state = match (&args.state, &args.nu) {
        (Some(ts), None) => {
            let v: Vec<&str> = ts.split(',').collect();
            if v.len() != 2 {
                bail!("--state `{ts}`: expected `t,s`");
            }
            StateLine {
                t: v[0].trim().parse::<Rational>().context("--state t")?,
                s: v[1].trim().parse::<Rational>().context("--state s")?,
            }
        }
        (None, Some(nu)) => StateLine::filling(nu.trim().parse::<Rational>().context("--nu")?),
        _ => bail!("give exactly one of --state t,s or --nu p/q"),
    };
    args.figure.check()?;
    if let Some(t) = &args.temperatures {
        if t.len() != args.files.len() {
            bail!(
                "--temperatures has {} values for {} files",
                t.len(),
                args.files.len()
            );
        }
    }
    let load = args.load.options()?;
    let mut maps = Vec::new();
    for (i, f) in args.files.iter().enumerate() {
        let mut m = load_map(f, &load, &TermProgress::new())?;
        if let Some(t) = &args.temperatures {
            m.meta.temperature_k = Some(t[i]);
        }
        maps.push(m);
    }
    let mut opts = GapOptions {
        gate: args.alpha_cm2_per_v.map(|a| SingleGate {
            alpha_m2_per_v: cm2_to_m2(a),
            v_cnp: args.v_cnp,
        }),
        n0_m2: args.n0_cm2.map(cm2_to_m2),
        ..GapOptions::default()
    };
    if let Some(r) = &args.t_range {
        let (lo, hi) = pair(r, "--t-range")?;
        opts.range = ActivatedRange::Given {
            t_min_k: lo,
            t_max_k: hi,
        };
    }
    let title = format!("activation gap of {}", state_title(state));
    let value = match (args.at_b, &args.b_range) {
        (Some(b), None) => {
            let a = gaps::activation(&maps, state, b, &opts)?;
            let title = format!("{title} at {} T", a.b_t);
            args.figure
                .write_with(|size| activation_figure(&a, None, &title, size))?;
            if !args.json {
                println!(
                    "Activation gap of (t, s) = ({}, {}) at {} T",
                    state.t, state.s, a.b_t
                );
                println!("  convention: {ARRHENIUS_CONVENTION}");
                println!("    T (K)     R_xx (Ω)      used");
                for p in &a.arrhenius.points {
                    println!(
                        "    {:<9.3} {:<13.5} {}",
                        p.temperature_k,
                        p.rxx_ohm,
                        if p.used { "yes" } else { "no" }
                    );
                }
                let f = &a.arrhenius;
                println!(
                    "  Δ = {:.3} ± {:.3} K = {:.4} ± {:.4} meV   R0 = {:.4} Ω   fitted {}–{} K",
                    f.gap_k,
                    f.gap_err_k,
                    f.gap_mev,
                    f.gap_err_mev,
                    f.r0_ohm,
                    f.fit_range_k.0,
                    f.fit_range_k.1
                );
            }
            serde_json::to_value(&a)?
        }
        (None, Some(r)) => {
            let range = pair(r, "--b-range")?;
            let g = gaps::gap_versus_field(&maps, state, range, &opts)?;
            let middle = 0.5 * (range.0 + range.1);
            let shown = g
                .fits
                .iter()
                .min_by(|a, b| (a.b_t - middle).abs().total_cmp(&(b.b_t - middle).abs()));
            match shown {
                Some(a) => {
                    let title = format!("{title}, (a) at {} T", a.b_t);
                    args.figure
                        .write_with(|size| activation_figure(a, Some(&g), &title, size))?
                }
                None if args.figure.figure.is_some() => {
                    bail!("no field of the range gave a gap, so there is no figure to draw")
                }
                None => {}
            }
            if !args.json {
                println!(
                    "Activation gap of (t, s) = ({}, {}) versus field",
                    state.t, state.s
                );
                println!("  convention: {ARRHENIUS_CONVENTION}");
                println!("    B (T)     Δ (K)       ± (K)");
                for (b, d, e) in &g.gaps {
                    println!("    {b:<9.4} {d:<11.4} {e:.4}");
                }
                for (b, why) in &g.refused {
                    println!("    {b:<9.4} not fitted: {why}");
                }
            }
            serde_json::to_value(&g)?
        }
        _ => bail!("give exactly one of --at-b B or --b-range lo,hi"),
    };
    let json = serde_json::to_string_pretty(&value)?;
    if let Some(p) = &args.out_json {
        write_atomic(p, json.as_bytes())?;
    }
    if args.json {
        println!("{json}");
    }
    Ok(())
}

//! `fanmark demo`: the whole job on the built-in demo devices, written to one folder.
//!
//! Each demo device is synthesised by the project's own generator, written as a long-format CSV
//! with its truth, loaded back through the same loader as a user's file, and reported on; then
//! calibrated and indexed (`DEVICE.index.json`, `DEVICE.states.csv`) and drawn: R_xx with the
//! found states labelled (PNG, SVG, PDF; single and double column), dR_xx/dn, and for the moiré
//! device the Wannier plane. The monolayer device adds a Shubnikov–de Haas/Berry-phase result and
//! an activation gap from a temperature series, and the dual-gated device its (n, D) map
//! ([`super::demo_quant`]).

use super::demo_quant::{dual_gate_demo, gap_demo, sdh_demo};
use super::figure::predicted_lines;
use super::index::states_csv;
use super::inspect;
use crate::figure::build::{build_figure, FigureChoices, FrameKind};
use crate::figure::{write, Format};
use crate::progress::TermProgress;
use anyhow::Context;
use fanmark_core::index::stack::Stack;
use fanmark_core::index::{index_map, IndexOptions, IndexReport};
use fanmark_core::io::{load_map, write::write_atomic, LoadOptions};
use fanmark_core::map::Map;
use fanmark_core::synth::{
    generate, truth_path_for, write_csv, write_truth, DeviceName, SynthConfig,
};
use std::path::PathBuf;

/// Arguments of `fanmark demo`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Folder to write everything to (created if missing).
    #[arg(long, default_value = "fanmark-demo")]
    pub out: PathBuf,
}

/// Run `fanmark demo`.
pub fn run(args: Args) -> anyhow::Result<()> {
    std::fs::create_dir_all(&args.out)
        .with_context(|| format!("creating the output folder {}", args.out.display()))?;
    for device in DeviceName::ALL {
        let syn = generate(&SynthConfig::demo(device))?;
        let csv = args.out.join(format!("{device}.csv"));
        write_csv(&csv, &syn)?;
        write_truth(&truth_path_for(&csv), &syn)?;
        let map = load_map(&csv, &LoadOptions::default(), &TermProgress::new())?;
        let report = inspect::report(&csv, &map);
        let text = inspect::text(&report);
        write_atomic(
            &args.out.join(format!("{device}.inspect.txt")),
            text.as_bytes(),
        )?;
        write_atomic(
            &args.out.join(format!("{device}.inspect.json")),
            serde_json::to_string_pretty(&report)?.as_bytes(),
        )?;
        println!("── {device}: {}", syn.truth.stack);
        print!("{text}");
        let stack = match device {
            DeviceName::Wren => Stack::Monolayer,
            DeviceName::Tern => Stack::MonolayerMoire,
        };
        let report = index_map(&map, &IndexOptions::new(stack))
            .with_context(|| format!("indexing {device}"))?;
        write_atomic(
            &args.out.join(format!("{device}.index.json")),
            serde_json::to_string_pretty(&report)?.as_bytes(),
        )?;
        write_atomic(
            &args.out.join(format!("{device}.states.csv")),
            states_csv(&report).as_bytes(),
        )?;
        println!(
            "indexed: {} states (α = {:.4e} cm⁻² V⁻¹, V_CNP = {:.3} V)",
            report.states.len(),
            report.calibration.alpha_cm2_per_v,
            report.calibration.v_cnp_v
        );
        for (name, fig) in demo_figures(device, &map, &report)? {
            let (figure, _) =
                build_figure(&map, &fig).with_context(|| format!("{device} {name}"))?;
            for format in formats_of(&name) {
                let ext = match format {
                    Format::Png => "png",
                    Format::Svg => "svg",
                    Format::Pdf => "pdf",
                };
                let path = args.out.join(format!("{device}.{name}.{ext}"));
                write(&figure, format, &path)
                    .with_context(|| format!("writing {}", path.display()))?;
            }
        }
        if device == DeviceName::Wren {
            sdh_demo(&args.out, device, &map, &report, syn.model.device.gate())?;
            gap_demo(&args.out, device, report.calibration.gate())?;
        }
    }
    dual_gate_demo(&args.out)?;
    println!("demo written to {}", args.out.display());
    Ok(())
}

/// The annotated R_xx figure goes out in every format; the others as PNG.
fn formats_of(name: &str) -> Vec<Format> {
    if name == "rxx" {
        vec![Format::Png, Format::Svg, Format::Pdf]
    } else {
        vec![Format::Png]
    }
}

/// The figures of one demo device: (file stem suffix, choices).
fn demo_figures(
    device: DeviceName,
    map: &Map,
    report: &IndexReport,
) -> anyhow::Result<Vec<(String, FigureChoices)>> {
    let gate = Some(report.calibration.gate());
    let n0_m2 = report.moire.map(|m| m.n0_cm2 * 1e4);
    let b_max = map.y().max();
    let base = FigureChoices {
        gate,
        n0_m2,
        states: report.states.clone(),
        ..FigureChoices::default()
    };
    let title = |what: &str| Some(format!("{device}: {what}"));
    let mut out = vec![
        (
            "rxx".to_string(),
            FigureChoices {
                title: title("R_{xx}, found states"),
                ..base.clone()
            },
        ),
        (
            "rxx-wide".to_string(),
            FigureChoices {
                title: title("R_{xx}, found states"),
                width_mm: 178.0,
                height_mm: 110.0,
                ..base.clone()
            },
        ),
        (
            "drxx_dn".to_string(),
            FigureChoices {
                channel: "drxx_dn".into(),
                title: title("dR_{xx}/dn"),
                states: Vec::new(),
                lines: predicted_lines(
                    &["integer".to_string()],
                    Stack::Monolayer,
                    1,
                    4,
                    12,
                    None,
                    b_max,
                )?,
                ..base.clone()
            },
        ),
    ];
    if device == DeviceName::Tern && n0_m2.is_some() {
        out.push((
            "wannier".to_string(),
            FigureChoices {
                frame: Some(FrameKind::Wannier),
                title: title("Wannier plane, found states"),
                ..base.clone()
            },
        ));
    }
    Ok(out)
}

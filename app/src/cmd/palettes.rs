//! `fanmark palettes`: list the built-in heat-map palettes and the companion overlay colours,
//! or write them all as files (`--write DIR`).

use anyhow::Context;
use fanmark_core::colour::{to_hex, Deficiency};
use fanmark_core::io::write::write_atomic;
use fanmark_core::palette;
use std::path::PathBuf;

/// Arguments of `fanmark palettes`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Write every palette as `<name>.json`, plus `companions.json` and `README.md`, into this
    /// directory (created if missing) instead of listing them.
    #[arg(long, value_name = "DIR")]
    pub write: Option<PathBuf>,
}

/// Run `fanmark palettes`.
pub fn run(args: Args) -> anyhow::Result<()> {
    match args.write {
        Some(dir) => write_all(&dir),
        None => {
            list();
            Ok(())
        }
    }
}

fn write_all(dir: &std::path::Path) -> anyhow::Result<()> {
    std::fs::create_dir_all(dir)
        .with_context(|| format!("{}: cannot create the directory", dir.display()))?;
    for f in palette::generated_files() {
        let path = dir.join(&f.name);
        write_atomic(&path, f.text.as_bytes())?;
        println!("wrote {}", path.display());
    }
    Ok(())
}

fn list() {
    println!(
        "{:<9} {:<11} {:>16}  {:<15}  use",
        "palette", "kind", "CIE L* first→last", "ends"
    );
    for p in palette::builtin() {
        let l = p.lightness_profile();
        let c = p.colours();
        println!(
            "{:<9} {:<11} {:>7.1} → {:>6.1}  {} {}  {}",
            p.name(),
            p.kind().name(),
            l[0],
            l[l.len() - 1],
            to_hex(c[0]),
            to_hex(c[c.len() - 1]),
            p.purpose()
        );
    }
    println!();
    println!(
        "companion overlay colours (smallest ΔE_OK: normal {:.3}, protanopia {:.3}, deuteranopia {:.3}):",
        palette::companion_min_delta_e(None),
        palette::companion_min_delta_e(Some(Deficiency::Protanopia)),
        palette::companion_min_delta_e(Some(Deficiency::Deuteranopia)),
    );
    for c in palette::companions() {
        println!(
            "  {:<14} fill {}  outline {}",
            c.name,
            to_hex(c.fill),
            to_hex(c.outline)
        );
    }
    println!();
    println!("Any palette also exists reversed as <name>-reversed.");
}

//! `fanmark demo`: the whole job on the built-in demo devices, written to one folder.
//!
//! Each demo device is synthesised by the project's own generator, written as a long-format CSV
//! with its truth, loaded back through the same loader as a user's file, and reported on.

use super::inspect;
use crate::progress::TermProgress;
use anyhow::Context;
use fanmark_core::io::{load_map, write::write_atomic, LoadOptions};
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
    }
    println!("demo written to {}", args.out.display());
    Ok(())
}

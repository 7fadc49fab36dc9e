//! fanmark: find, index and publish the gaps of Landau fans and Wannier diagrams.

mod cmd;
mod figure;
mod progress;

use clap::{Parser, Subcommand};
use std::process::ExitCode;

/// Quantum Hall and moiré transport maps: calibrate the gate, find and index every gap,
/// publish annotated figures.
#[derive(Parser, Debug)]
#[command(name = "fanmark", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Subcommand, Debug)]
enum Command {
    /// Describe a data file: axes, ranges, steps, channels, units, sweeps, gridding report.
    Inspect(cmd::inspect::Args),
    /// Write a synthetic device's map (long-format CSV) and its truth (JSON).
    Synth(cmd::synth::Args),
    /// Run the whole job on the built-in demo devices.
    Demo(cmd::demo::Args),
    /// Print the predicted lines (t, s) for a described device.
    Lines(cmd::lines::Args),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Inspect(a) => cmd::inspect::run(a),
        Command::Synth(a) => cmd::synth::run(a),
        Command::Demo(a) => cmd::demo::run(a),
        Command::Lines(a) => cmd::lines::run(a),
    };
    match result {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("fanmark: error: {e}");
            let mut src = e.source();
            while let Some(s) = src {
                eprintln!("  caused by: {s}");
                src = s.source();
            }
            ExitCode::from(2)
        }
    }
}

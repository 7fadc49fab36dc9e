//! fanmark: find, index and publish the gaps of Landau fans and Wannier diagrams.

use clap::{Parser, Subcommand};
use fanmark::cmd;
use std::process::ExitCode;

/// Quantum Hall and moiré transport maps: calibrate the gate, find and index every gap,
/// publish annotated figures.
#[derive(Parser, Debug)]
#[command(name = "fanmark", version, about, long_about = None)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

// Arguments are parsed once; boxing the larger variants would buy nothing.
#[allow(clippy::large_enum_variant)]
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
    /// List the built-in heat-map palettes and overlay colours, or write them as files.
    Palettes(cmd::palettes::Args),
    /// Calibrate the gate from the data: Hall slope, quantum Hall fan and geometry.
    Calibrate(cmd::calibrate::Args),
    /// Find and index every gap: states with (t, s), score, onset and Hall check.
    Index(cmd::index::Args),
    /// Shubnikov–de Haas frequency, density and Berry phase of a trace at fixed gate or density.
    Sdh(cmd::sdh::Args),
    /// Activation gap of a state from maps at several temperatures.
    Gaps(cmd::gaps::Args),
    /// Resample a dual-gate map onto (n, D/ε₀), with constant-ν lines and line cuts.
    Dualgate(cmd::dualgate::Args),
    /// Draw a publication figure (PNG, SVG or PDF) of one channel with lines and found states.
    Figure(cmd::figure::Args),
    /// Explore a map in a window: snap to features, label states, keep the work, export.
    View(cmd::view::Args),
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    let result = match cli.command {
        Command::Inspect(a) => cmd::inspect::run(a),
        Command::Synth(a) => cmd::synth::run(a),
        Command::Demo(a) => cmd::demo::run(a),
        Command::Lines(a) => cmd::lines::run(a),
        Command::Palettes(a) => cmd::palettes::run(a),
        Command::Calibrate(a) => cmd::calibrate::run(a),
        Command::Index(a) => cmd::index::run(a),
        Command::Sdh(a) => cmd::sdh::run(a),
        Command::Gaps(a) => cmd::gaps::run(a),
        Command::Dualgate(a) => cmd::dualgate::run(a),
        Command::Figure(a) => cmd::figure::run(a),
        Command::View(a) => cmd::view::run(a),
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

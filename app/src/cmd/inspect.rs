//! `fanmark inspect FILE`: what a data file holds once loaded — axes, ranges, steps, channels,
//! units, sweep directions, missing values and what the gridding did.

use super::load_args::LoadArgs;
use crate::progress::TermProgress;
use fanmark_core::grid::GridReport;
use fanmark_core::io::load_map;
use fanmark_core::map::{Axis, Map, SweepDirection};
use serde::Serialize;
use std::path::PathBuf;

/// Arguments of `fanmark inspect`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// The data file (long CSV/TSV, matrix text, .npy, .npz, HDF5).
    pub file: PathBuf,
    /// Print the report as JSON instead of text.
    #[arg(long)]
    pub json: bool,
    #[command(flatten)]
    pub load: LoadArgs,
}

/// One axis as reported; values in the unit named by `unit`.
#[derive(Serialize, Debug)]
pub struct AxisReport {
    name: String,
    quantity: String,
    unit: String,
    points: usize,
    min: f64,
    max: f64,
    median_step: f64,
    uniform: bool,
}

/// One channel as reported, in SI units.
#[derive(Serialize, Debug)]
pub struct ChannelReport {
    name: String,
    unit: String,
    min: Option<f64>,
    max: Option<f64>,
    nan_count: usize,
}

/// The whole inspection report (the `--json` output).
#[derive(Serialize, Debug)]
pub struct Report {
    file: String,
    columns: Vec<(String, String)>,
    x: AxisReport,
    y: AxisReport,
    channels: Vec<ChannelReport>,
    rows_up: usize,
    rows_down: usize,
    rows_unknown_direction: usize,
    #[serde(rename = "temperature_K")]
    temperature_k: Option<f64>,
    gridding: Option<GridReport>,
    notes: Vec<String>,
}

fn axis_report(a: &Axis) -> AxisReport {
    let (unit, scale) = a.quantity.display_unit();
    AxisReport {
        name: a.name.clone(),
        quantity: a.quantity.symbol().to_string(),
        unit: unit.to_string(),
        points: a.len(),
        min: a.min() / scale,
        max: a.max() / scale,
        median_step: a.median_step() / scale,
        uniform: a.is_uniform(1e-6),
    }
}

/// Build the report of a loaded map.
pub fn report(file: &std::path::Path, m: &Map) -> Report {
    let count = |d: SweepDirection| m.meta.row_directions.iter().filter(|&&r| r == d).count();
    Report {
        file: file.display().to_string(),
        columns: m.meta.columns.clone(),
        x: axis_report(m.x()),
        y: axis_report(m.y()),
        channels: m
            .channels()
            .iter()
            .map(|c| {
                let fin = c.data.iter().copied().filter(|v| v.is_finite());
                let (lo, hi) = fin.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), v| {
                    (a.min(v), b.max(v))
                });
                ChannelReport {
                    name: c.name.clone(),
                    unit: c.unit.clone(),
                    min: lo.is_finite().then_some(lo),
                    max: hi.is_finite().then_some(hi),
                    nan_count: c.data.iter().filter(|v| v.is_nan()).count(),
                }
            })
            .collect(),
        rows_up: count(SweepDirection::Up),
        rows_down: count(SweepDirection::Down),
        rows_unknown_direction: count(SweepDirection::Unknown),
        temperature_k: m.meta.temperature_k,
        gridding: m.meta.gridding.clone(),
        notes: m.meta.notes.clone(),
    }
}

fn g(v: f64) -> String {
    if v == 0.0 {
        return "0".into();
    }
    let s = if v.abs() >= 1e5 || v.abs() < 1e-3 {
        format!("{v:.4e}")
    } else {
        format!("{:.6}", v)
            .trim_end_matches('0')
            .trim_end_matches('.')
            .to_string()
    };
    s.replace('-', "−")
}

/// The report as readable text.
pub fn text(r: &Report) -> String {
    let mut out = String::new();
    let mut line = |s: String| {
        out.push_str(&s);
        out.push('\n');
    };
    line(format!("file      {}", r.file));
    if !r.columns.is_empty() {
        let cols: Vec<String> = r
            .columns
            .iter()
            .map(|(a, b)| format!("{a} ← {b}"))
            .collect();
        line(format!("columns   {}", cols.join(", ")));
    }
    for (tag, a) in [("x", &r.x), ("y", &r.y)] {
        line(format!(
            "{tag} axis    {} ({}): {} points, {} … {} {}, median step {} {} ({})",
            a.quantity,
            a.name,
            a.points,
            g(a.min),
            g(a.max),
            a.unit,
            g(a.median_step),
            a.unit,
            if a.uniform { "uniform" } else { "non-uniform" }
        ));
    }
    for c in &r.channels {
        let range = match (c.min, c.max) {
            (Some(lo), Some(hi)) => format!("{} … {} {}", g(lo), g(hi), c.unit),
            _ => "no finite values".into(),
        };
        line(format!(
            "channel   {}: {range}, {} NaN",
            c.name, c.nan_count
        ));
    }
    line(format!(
        "rows      {} up, {} down, {} unknown direction",
        r.rows_up, r.rows_down, r.rows_unknown_direction
    ));
    if let Some(t) = r.temperature_k {
        line(format!("temperature {} K", g(t)));
    }
    if let Some(gr) = &r.gridding {
        line(format!(
            "gridding  {} sweeps → {} rows × {} columns, {}",
            gr.sweeps,
            gr.rows,
            gr.columns,
            if gr.exact {
                "exact (the file was already a regular grid)".to_string()
            } else {
                format!("interpolated onto a step of {}", g(gr.step))
            }
        ));
        line(format!(
            "          {} points read, {} dropped (no coordinate), {} duplicates averaged, \
             {} rows merged, {} glitches{}, {} short sweeps",
            gr.points_read,
            gr.points_dropped,
            gr.duplicates_averaged,
            gr.rows_merged,
            gr.glitches,
            match (gr.glitches, gr.glitches_removed) {
                (0, _) => "",
                (_, true) => " set to NaN",
                (_, false) => " kept (--drop-glitches sets them to NaN)",
            },
            gr.short_sweeps
        ));
        match &gr.hysteresis {
            Some(h) => line(format!(
                "hysteresis down sweeps shifted by {} ± {} (SI units of the sweep axis) over {} up/down pairs",
                g(h.shift),
                g(h.spread),
                h.pairs
            )),
            None => line("hysteresis not estimated (sweeps do not alternate)".into()),
        }
    }
    for n in &r.notes {
        line(format!("note      {n}"));
    }
    out
}

/// Run `fanmark inspect`.
pub fn run(args: Args) -> anyhow::Result<()> {
    let opts = args.load.options()?;
    let map = load_map(&args.file, &opts, &TermProgress::new())?;
    let r = report(&args.file, &map);
    if args.json {
        println!("{}", serde_json::to_string_pretty(&r)?);
    } else {
        print!("{}", text(&r));
    }
    Ok(())
}

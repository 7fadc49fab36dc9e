//! Options shared by every command that reads a data file, turned into `LoadOptions`.

use anyhow::{bail, Context};
use fanmark_core::grid::GridOptions;
use fanmark_core::io::{
    columns::parse_mapping, DuplicatePolicy, Format, LoadOptions, MatrixOptions,
};
use std::path::PathBuf;

/// How to read the data file.
#[derive(clap::Args, Debug, Clone, Default)]
pub struct LoadArgs {
    /// Map columns (or array keys) to roles, e.g. `gate=V1,field=B_magnet,rxx=R4pt`.
    /// Roles: gate, top_gate, bottom_gate, field, density, temperature, rxx, rxy, sxx, sxy.
    #[arg(long, value_name = "ROLE=NAME,…")]
    pub columns: Option<String>,
    /// Read the file as this format instead of guessing from its extension:
    /// csv, matrix, npy, npz, hdf5.
    #[arg(long, value_name = "FORMAT")]
    pub format: Option<String>,
    /// Spacing of the common sweep axis when gridding ragged sweeps, in the file's SI unit
    /// of that axis (V or T); default: the median step of the data.
    #[arg(long, value_name = "STEP")]
    pub grid_step: Option<f64>,
    /// Set single-point glitches to NaN (by default they are kept and only counted: a real
    /// feature one point wide looks the same).
    #[arg(long)]
    pub drop_glitches: bool,
    /// What to do with repeated points: `average` (default) or `error`.
    #[arg(long, value_name = "POLICY", default_value = "average")]
    pub duplicates: String,
    /// Matrix/array input: file with the column-axis vector.
    #[arg(long, value_name = "FILE")]
    pub x_axis_file: Option<PathBuf>,
    /// Matrix/array input: file with the row-axis vector.
    #[arg(long, value_name = "FILE")]
    pub y_axis_file: Option<PathBuf>,
    /// Matrix/array input: role and unit of the column axis as a header, e.g. `vg_mV`.
    #[arg(long, value_name = "HEADER")]
    pub x_header: Option<String>,
    /// Matrix/array input: role and unit of the row axis, e.g. `b_T`.
    #[arg(long, value_name = "HEADER")]
    pub y_header: Option<String>,
    /// Matrix/array input: role and unit of the channel, e.g. `rxx_kohm`.
    #[arg(long, value_name = "HEADER")]
    pub channel_header: Option<String>,
    /// Sample temperature in K to record with the map.
    #[arg(long, value_name = "K")]
    pub temperature_k: Option<f64>,
}

impl LoadArgs {
    /// The library's load options.
    pub fn options(&self) -> anyhow::Result<LoadOptions> {
        let format = match self.format.as_deref() {
            None => None,
            Some("csv" | "tsv" | "long") => Some(Format::LongCsv),
            Some("matrix") => Some(Format::Matrix),
            Some("npy") => Some(Format::Npy),
            Some("npz") => Some(Format::Npz),
            Some("hdf5" | "h5") => Some(Format::Hdf5),
            Some(other) => bail!("unknown --format `{other}`: use csv, matrix, npy, npz or hdf5"),
        };
        let duplicates = match self.duplicates.as_str() {
            "average" => DuplicatePolicy::Average,
            "error" => DuplicatePolicy::Error,
            other => bail!("unknown --duplicates `{other}`: use average or error"),
        };
        let columns = match &self.columns {
            Some(text) => parse_mapping(text).context("reading --columns")?,
            None => Vec::new(),
        };
        Ok(LoadOptions {
            format,
            columns,
            duplicates,
            grid: GridOptions {
                step: self.grid_step,
                remove_glitches: self.drop_glitches,
                step_tolerance: None,
            },
            matrix: MatrixOptions {
                x_axis_file: self.x_axis_file.clone(),
                y_axis_file: self.y_axis_file.clone(),
                x_header: self.x_header.clone(),
                y_header: self.y_header.clone(),
                channel_header: self.channel_header.clone(),
            },
            temperature_k: self.temperature_k,
        })
    }
}

//! Reading measurement files into [`Map`]s, and writing the project's own long-format CSV.
//!
//! Formats: long-format CSV/TSV (one row per point, gridded on load), plain matrix text (one
//! channel with its two axis vectors), NumPy `.npy`/`.npz`, and HDF5 with the `hdf5` feature.
//! Every loader streams, reports progress through [`Progress`] and returns typed errors that
//! name the file and, where there is one, the line and column.

pub(crate) mod blocks;
pub mod columns;
pub mod csv_long;
pub mod decimal;
#[cfg(feature = "hdf5")]
pub mod hdf5;
pub mod matrix;
pub mod npy;
pub mod write;

use crate::error::{Error, Result};
use crate::grid::GridOptions;
use crate::map::Map;
use crate::progress::Progress;
use columns::Role;
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// Open a data file that must not be empty: the file and its length in bytes.
pub(crate) fn open_nonempty(path: &Path) -> Result<(std::fs::File, u64)> {
    let io = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let file = std::fs::File::open(path).map_err(io)?;
    let len = file.metadata().map_err(io)?.len();
    if len == 0 {
        return Err(Error::EmptyFile {
            path: path.to_path_buf(),
        });
    }
    Ok((file, len))
}

/// The file formats fanmark reads.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Format {
    /// Long-format delimited text, one row per point (comma, tab or semicolon).
    LongCsv,
    /// Plain matrix text: one channel, axis vectors as first row/column or separate files.
    Matrix,
    /// NumPy `.npy` (one 2D array; axes from options or sibling files).
    Npy,
    /// NumPy `.npz` archive of named arrays.
    Npz,
    /// HDF5 file (needs the `hdf5` feature).
    Hdf5,
}

impl Format {
    /// Guess the format from the file name (and, for text, the caller may override).
    pub fn from_path(path: &Path) -> Option<Format> {
        let ext = path.extension()?.to_str()?.to_ascii_lowercase();
        Some(match ext.as_str() {
            "csv" | "tsv" | "txt" | "dat" => Format::LongCsv,
            "npy" => Format::Npy,
            "npz" => Format::Npz,
            "h5" | "hdf5" | "hdf" => Format::Hdf5,
            "mat" | "matrix" => Format::Matrix,
            _ => return None,
        })
    }
}

/// What to do with several measurements of the same point.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum DuplicatePolicy {
    /// Average them and report how many were averaged.
    #[default]
    Average,
    /// Refuse the file, naming the first duplicate.
    Error,
}

/// Options of the matrix-text and array loaders: where the axes are and what they measure.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MatrixOptions {
    /// File holding the column-axis vector (one value per line) instead of a first row.
    pub x_axis_file: Option<PathBuf>,
    /// File holding the row-axis vector instead of a first column.
    pub y_axis_file: Option<PathBuf>,
    /// Role and unit of the column axis as a header would say it (default `vg_V`).
    pub x_header: Option<String>,
    /// Role and unit of the row axis (default `b_T`).
    pub y_header: Option<String>,
    /// Role and unit of the single channel (default `rxx_ohm`).
    pub channel_header: Option<String>,
}

/// Everything a caller may tell a loader.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct LoadOptions {
    /// Force a format instead of guessing it from the extension.
    pub format: Option<Format>,
    /// Explicit role → header (or array key) mapping; overrides recognition by name.
    pub columns: Vec<(Role, String)>,
    /// Policy for repeated points.
    pub duplicates: DuplicatePolicy,
    /// Gridding choices for ragged sweeps.
    pub grid: GridOptions,
    /// Matrix and array options.
    pub matrix: MatrixOptions,
    /// Sample temperature in K to record on the map (overrides one found in the file).
    pub temperature_k: Option<f64>,
}

/// Load a map from `path` in the format its extension (or `opts.format`) names.
pub fn load_map(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<Map> {
    check_readable_file(path)?;
    let format = match opts.format.or_else(|| Format::from_path(path)) {
        Some(f) => f,
        None => sniff_format(path)?,
    };
    let mut map = match format {
        Format::LongCsv => csv_long::load(path, opts, progress)?,
        Format::Matrix => matrix::load(path, opts, progress)?,
        Format::Npy => npy::load_npy(path, opts, progress)?,
        Format::Npz => npy::load_npz(path, opts, progress)?,
        #[cfg(feature = "hdf5")]
        Format::Hdf5 => hdf5::load(path, opts, progress)?,
        #[cfg(not(feature = "hdf5"))]
        Format::Hdf5 => {
            return Err(Error::UnsupportedFormat {
                path: path.to_path_buf(),
                message: "HDF5 input needs fanmark built with `--features hdf5` \
                          (and the system HDF5 library); convert to .npz or CSV otherwise"
                    .into(),
            })
        }
    };
    map.meta.source = Some(path.to_path_buf());
    if opts.temperature_k.is_some() {
        map.meta.temperature_k = opts.temperature_k;
    }
    Ok(map)
}

/// Clear errors for a missing path or a directory before any format code runs.
pub fn check_readable_file(path: &Path) -> Result<()> {
    let md = std::fs::metadata(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    if md.is_dir() {
        return Err(Error::IsDirectory {
            path: path.to_path_buf(),
        });
    }
    Ok(())
}

/// Decide between the binary formats and text by the first bytes, for unknown extensions.
fn sniff_format(path: &Path) -> Result<Format> {
    use std::io::Read;
    let mut head = [0u8; 8];
    let n = std::fs::File::open(path)
        .and_then(|mut f| f.read(&mut head))
        .map_err(|source| Error::Io {
            path: path.to_path_buf(),
            source,
        })?;
    let head = &head[..n];
    Ok(if head.starts_with(b"\x93NUMPY") {
        Format::Npy
    } else if head.starts_with(b"PK\x03\x04") {
        Format::Npz
    } else if head.starts_with(b"\x89HDF") {
        Format::Hdf5
    } else {
        Format::LongCsv
    })
}

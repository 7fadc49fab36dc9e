//! Gridding ragged sweeps onto a regular map without inventing data.
//!
//! Each sweep (e.g. one gate sweep at fixed field) is linearly interpolated along its swept
//! coordinate onto one common axis; nothing is extrapolated past a sweep's ends (NaN there);
//! the stepped coordinate keeps its measured values (a non-uniform axis). Sweeps at the same
//! stepped value are averaged. What was done is reported in a [`GridReport`].

use serde::{Deserialize, Serialize};

/// Choices for gridding.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct GridOptions {
    /// Spacing of the common swept axis in SI units; default: the median step of the data.
    pub step: Option<f64>,
    /// Remove single-point glitches (a point far from both neighbours, judged against the
    /// row's robust noise) by setting them to NaN; they are counted in the report either way.
    pub remove_glitches: bool,
    /// Two sweeps whose stepped values differ by less than this (SI) are the same row;
    /// default: 10⁻⁶ of the stepped range.
    pub step_tolerance: Option<f64>,
}

impl Default for GridOptions {
    fn default() -> Self {
        GridOptions {
            step: None,
            remove_glitches: true,
            step_tolerance: None,
        }
    }
}

/// Hysteresis between up and down sweeps, estimated from the data.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Hysteresis {
    /// Median shift of down-sweep features relative to up-sweep features along the swept axis
    /// (SI units of that axis; positive: features appear at larger values on the way down).
    pub shift: f64,
    /// Robust spread (1.4826 × median absolute deviation) of the per-pair shifts.
    pub spread: f64,
    /// Number of adjacent up/down pairs used.
    pub pairs: usize,
}

/// What gridding did.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct GridReport {
    /// Sweeps read.
    pub sweeps: usize,
    /// Rows in the map after merging sweeps at the same stepped value.
    pub rows: usize,
    /// Points on the common swept axis.
    pub columns: usize,
    /// Points read from the file.
    pub points_read: usize,
    /// Points dropped because a coordinate was NaN or not finite.
    pub points_dropped: usize,
    /// Points that repeated an earlier swept value in the same sweep and were averaged.
    pub duplicates_averaged: usize,
    /// Rows formed by averaging more than one sweep.
    pub rows_merged: usize,
    /// Single-point glitches found (and removed when asked).
    pub glitches: usize,
    /// Sweeps covering less than 80 % of the median sweep span (e.g. aborted).
    pub short_sweeps: usize,
    /// Grid cells left NaN per channel (outside a sweep's range, or NaN in the data).
    pub nan_cells: Vec<(String, usize)>,
    /// Spacing of the common swept axis (SI).
    pub step: f64,
    /// True if the data was already on one regular set of swept points, so the grid holds
    /// exactly the measured values with no interpolation.
    pub exact: bool,
    /// Up/down hysteresis estimate, when the sweeps alternate.
    pub hysteresis: Option<Hysteresis>,
}

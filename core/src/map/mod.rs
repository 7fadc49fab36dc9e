//! The map model: a regular 2D grid with two named, unit-carrying axes and any number of named
//! channels of the same shape (NaN where nothing was measured), plus where it came from.
//!
//! Orientation: `data[[row, col]]` with rows along `y` and columns along `x`. Loaders put the
//! gate-like axis on `x` and the field (or second gate) on `y`. Values are SI throughout.

mod axis;

pub use axis::{Axis, Quantity};

use crate::error::{Error, Result};
use ndarray::Array2;
use serde::{Deserialize, Serialize};
use std::path::PathBuf;

/// What a channel holds; fixes its SI unit.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ChannelKind {
    /// Longitudinal resistance R_xx, Ω.
    Rxx,
    /// Hall resistance R_xy, Ω.
    Rxy,
    /// Longitudinal conductivity σ_xx, S.
    SigmaXx,
    /// Hall conductivity σ_xy, S.
    SigmaXy,
    /// A channel derived or read that is none of the above; unit in the channel.
    Other,
}

/// One named 2D data channel on the map's grid.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Channel {
    /// Name, e.g. `rxx`, `rxy`, `drxx_dn`.
    pub name: String,
    /// What the channel measures.
    pub kind: ChannelKind,
    /// Unit symbol of the stored values (SI: Ω, S, or e.g. `Ω m²` for dR/dn).
    pub unit: String,
    /// Values, shape (y.len(), x.len()); NaN where nothing was measured.
    pub data: Array2<f64>,
}

impl Channel {
    /// A channel of the given kind with its SI unit.
    pub fn new(name: impl Into<String>, kind: ChannelKind, data: Array2<f64>) -> Channel {
        let unit = match kind {
            ChannelKind::Rxx | ChannelKind::Rxy => "Ω",
            ChannelKind::SigmaXx | ChannelKind::SigmaXy => "S",
            ChannelKind::Other => "",
        };
        Channel {
            name: name.into(),
            kind,
            unit: unit.into(),
            data,
        }
    }
    /// Same channel with a different unit label.
    pub fn with_unit(mut self, unit: impl Into<String>) -> Channel {
        self.unit = unit.into();
        self
    }
}

/// Direction of one sweep (one row or column as measured).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum SweepDirection {
    /// The swept coordinate increased during the sweep.
    Up,
    /// The swept coordinate decreased.
    Down,
    /// Not known (e.g. a matrix file, or a one-point sweep).
    Unknown,
}

/// One measured sweep exactly as read: the stepped coordinate's value and the swept points.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct RawSweep {
    /// Value of the stepped coordinate during the sweep (SI), e.g. B for a gate sweep.
    pub step_value: f64,
    /// Direction in which the swept coordinate moved.
    pub direction: SweepDirection,
    /// 1-based line of the file where the sweep starts (0 when not from a text file).
    pub first_line: usize,
    /// Swept coordinate at each point, in measurement order (SI).
    pub swept: Vec<f64>,
    /// Channel values at each point, one vector per channel in the map's channel order (SI).
    pub values: Vec<Vec<f64>>,
}

/// Which original points a map keeps.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case", tag = "kind")]
pub enum RawPoints {
    /// The grid holds exactly the measured points (the file was already regular).
    #[default]
    GridIsExact,
    /// The original ragged sweeps, as measured.
    Sweeps {
        /// Which map axis was swept (`x` or `y`).
        swept_axis: char,
        /// The sweeps in file order.
        sweeps: Vec<RawSweep>,
    },
}

/// Where a map came from and what was done to it on the way in.
#[derive(Debug, Clone, Default, PartialEq, Serialize, Deserialize)]
pub struct MapMeta {
    /// The file it was read from, if any.
    pub source: Option<PathBuf>,
    /// Role → header (or key) mapping that was used, e.g. `("gate", "vg_V")`.
    pub columns: Vec<(String, String)>,
    /// Direction of each row's sweep (same length as `y`), `Unknown` where not known.
    pub row_directions: Vec<SweepDirection>,
    /// Free notes: what the loader and the gridding did.
    pub notes: Vec<String>,
    /// Sample temperature in K if the file or the user gave one.
    pub temperature_k: Option<f64>,
    /// Gridding report, when the map was gridded from ragged sweeps.
    pub gridding: Option<crate::grid::GridReport>,
}

/// A regular 2D map: axes `x` (columns) and `y` (rows) and named channels of shape
/// `(y.len(), x.len())`.
///
/// Invariants: every channel's shape equals `(y.len(), x.len())`; channel names are unique;
/// axes are strictly increasing (see [`Axis`]).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Map {
    x: Axis,
    y: Axis,
    channels: Vec<Channel>,
    /// Provenance and notes.
    pub meta: MapMeta,
    /// The original points.
    pub raw: RawPoints,
}

impl Map {
    /// A map with no channels yet.
    pub fn new(x: Axis, y: Axis) -> Map {
        let rows = y.len();
        Map {
            x,
            y,
            channels: Vec::new(),
            meta: MapMeta {
                row_directions: vec![SweepDirection::Unknown; rows],
                ..MapMeta::default()
            },
            raw: RawPoints::GridIsExact,
        }
    }

    /// Add a channel; errors if its shape does not match the axes or its name is taken.
    pub fn add_channel(&mut self, channel: Channel) -> Result<()> {
        let want = (self.y.len(), self.x.len());
        if channel.data.dim() != want {
            return Err(Error::MapRequirement(format!(
                "channel `{}` has shape {:?}, the map's axes need {:?} (rows = {}, columns = {})",
                channel.name,
                channel.data.dim(),
                want,
                self.y.name,
                self.x.name
            )));
        }
        if self.channel(&channel.name).is_some() {
            return Err(Error::MapRequirement(format!(
                "a channel named `{}` already exists",
                channel.name
            )));
        }
        self.channels.push(channel);
        Ok(())
    }

    /// Replace a channel of the same name, or add it.
    pub fn set_channel(&mut self, channel: Channel) -> Result<()> {
        if let Some(i) = self.channels.iter().position(|c| c.name == channel.name) {
            let removed = self.channels.remove(i);
            if let Err(e) = self.add_channel(channel) {
                self.channels.insert(i, removed);
                return Err(e);
            }
            let last = self.channels.pop().expect("just added");
            self.channels.insert(i, last);
            Ok(())
        } else {
            self.add_channel(channel)
        }
    }

    /// The column axis.
    pub fn x(&self) -> &Axis {
        &self.x
    }
    /// The row axis.
    pub fn y(&self) -> &Axis {
        &self.y
    }
    /// Grid shape (rows, columns) = (y.len(), x.len()).
    pub fn shape(&self) -> (usize, usize) {
        (self.y.len(), self.x.len())
    }
    /// All channels in order.
    pub fn channels(&self) -> &[Channel] {
        &self.channels
    }
    /// The channel with this name.
    pub fn channel(&self, name: &str) -> Option<&Channel> {
        self.channels.iter().find(|c| c.name == name)
    }
    /// The first channel of this kind.
    pub fn channel_of(&self, kind: ChannelKind) -> Option<&Channel> {
        self.channels.iter().find(|c| c.kind == kind)
    }
    /// The first channel of this kind, or a clear error naming what the map has.
    pub fn require(&self, kind: ChannelKind) -> Result<&Channel> {
        self.channel_of(kind).ok_or_else(|| {
            Error::MapRequirement(format!(
                "the map has no {kind:?} channel (channels: {})",
                self.channel_names()
            ))
        })
    }
    /// The channel with this name, or a clear error naming what the map has.
    pub fn require_named(&self, name: &str) -> Result<&Channel> {
        self.channel(name).ok_or_else(|| {
            Error::MapRequirement(format!(
                "the map has no channel `{name}` (channels: {})",
                self.channel_names()
            ))
        })
    }
    /// The channels' names, comma separated, for messages.
    pub fn channel_names(&self) -> String {
        self.channels
            .iter()
            .map(|c| c.name.as_str())
            .collect::<Vec<_>>()
            .join(", ")
    }
    /// The axis measuring `q`, if `x` or `y` does.
    pub fn axis_of(&self, q: Quantity) -> Option<(char, &Axis)> {
        if self.x.quantity == q {
            Some(('x', &self.x))
        } else if self.y.quantity == q {
            Some(('y', &self.y))
        } else {
            None
        }
    }
    /// The axis of quantity `q`, or an error saying that `purpose` needs it (e.g. "field
    /// symmetrisation needs a magnetic-field axis") and naming the map's axes.
    pub fn require_axis(&self, q: Quantity, purpose: &str) -> Result<(char, &Axis)> {
        self.axis_of(q)
            .ok_or_else(|| Error::MapRequirement(format!("{purpose}; {}", self.axes_text())))
    }

    /// "the map's axes are `vg_V` (Gate) and `b_T` (Field)", for error messages.
    pub fn axes_text(&self) -> String {
        format!(
            "the map's axes are `{}` ({:?}) and `{}` ({:?})",
            self.x.name, self.x.quantity, self.y.name, self.y.quantity
        )
    }

    /// Replace an axis by one of the same length (an axis change, e.g. V_g → n).
    pub fn replace_axis(&mut self, which: char, axis: Axis) -> Result<()> {
        let slot = match which {
            'x' => &mut self.x,
            'y' => &mut self.y,
            _ => return Err(Error::invalid("axis", "must be `x` or `y`")),
        };
        if slot.len() != axis.len() {
            return Err(Error::MapRequirement(format!(
                "replacement axis `{}` has {} points, the map's has {}",
                axis.name,
                axis.len(),
                slot.len()
            )));
        }
        *slot = axis;
        Ok(())
    }
    /// Remove and return all channels (for rebuilding a map on new axes).
    pub fn into_parts(self) -> (Axis, Axis, Vec<Channel>, MapMeta, RawPoints) {
        (self.x, self.y, self.channels, self.meta, self.raw)
    }
    /// Number of NaN values per channel, in channel order.
    pub fn nan_counts(&self) -> Vec<(String, usize)> {
        self.channels
            .iter()
            .map(|c| (c.name.clone(), count_nan(&c.data)))
            .collect()
    }
}

/// Number of NaN values in `data`, counted in parallel blocks when it is contiguous.
fn count_nan(data: &Array2<f64>) -> usize {
    use rayon::prelude::*;
    let nan = |s: &[f64]| s.iter().map(|v| usize::from(v.is_nan())).sum::<usize>();
    match data.as_slice_memory_order() {
        Some(s) => s.par_chunks(1 << 16).map(nan).sum(),
        None => data.iter().filter(|v| v.is_nan()).count(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn channel_shapes_are_checked() {
        let x = Axis::uniform("vg", Quantity::Gate, 0.0, 1.0, 3).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 0.0, 1.0, 2).unwrap();
        let mut m = Map::new(x, y);
        assert!(m
            .add_channel(Channel::new("rxx", ChannelKind::Rxx, Array2::zeros((2, 3))))
            .is_ok());
        let e = m
            .add_channel(Channel::new("rxy", ChannelKind::Rxy, Array2::zeros((3, 2))))
            .unwrap_err();
        assert!(e.to_string().contains("shape"));
        assert!(m
            .add_channel(Channel::new("rxx", ChannelKind::Rxx, Array2::zeros((2, 3))))
            .is_err());
        assert!(m.require(ChannelKind::Rxy).is_err());
        assert_eq!(m.require(ChannelKind::Rxx).unwrap().unit, "Ω");
        assert_eq!(m.require_named("rxx").unwrap().kind, ChannelKind::Rxx);
        let e = m.require_named("r4pt").unwrap_err().to_string();
        assert!(e.contains("`r4pt`") && e.contains("channels: rxx"), "{e}");
        let mut d = Array2::zeros((2, 3));
        d[[1, 2]] = f64::NAN;
        m.set_channel(Channel::new("rxx", ChannelKind::Rxx, d))
            .unwrap();
        assert_eq!(m.nan_counts(), vec![("rxx".to_string(), 1)]);
        assert_eq!(m.meta.row_directions.len(), 2);
    }

    #[test]
    fn nan_count_of_a_large_channel_and_of_a_transposed_one() {
        // 300 000 values over several counting blocks; every 7th is missing.
        let d = Array2::from_shape_fn((300, 1000), |(r, c)| {
            if (r * 1000 + c) % 7 == 0 {
                f64::NAN
            } else {
                1.0
            }
        });
        assert_eq!(count_nan(&d), 300_000usize.div_ceil(7));
        let t = d.t().to_owned();
        assert_eq!(count_nan(&t), 42_858);
        let strided = d.slice(ndarray::s![.., ..;2]).to_owned();
        // Even columns of rows whose start is ≡ 0, 1, …, 6 (mod 7): every 7th even index.
        assert_eq!(
            count_nan(&strided),
            (0..150_000).filter(|k| (2 * k) % 7 == 0).count()
        );
    }
}

//! From a map and a few choices to a [`Figure`]: one panel with the heat map of one channel in
//! one frame ((V_g, B), (n, B), (ν, B) or the Wannier plane), axes with units, secondary axes,
//! a colour bar, predicted lines and detected states from the shared line model, labels,
//! markers, a legend and a title. The figure command and the viewer both build through here.
//!
//! Units shown: V_g in V, n in 10¹² cm⁻², B in T, ν, n/n₀ and φ/φ₀ dimensionless; resistances
//! in Ω or kΩ, conductivities in e²/h, density derivatives per 10¹² cm⁻². Inside, SI.

use super::scene::{
    AxisSpec, ColorBar, ColorScale, Corner, Figure, HeatMap, Legend, LegendEntry, Markers, Panel,
    Polyline, Resample, SecondaryAxis, Swatch, TextLabel, ValueRange,
};
use super::style::{line_style, state_family, state_marker, Role};
use fanmark_core::conductivity::SampleGeometry;
use fanmark_core::constants::{E2_OVER_H, E_OVER_H, FLUX_QUANTUM_H_OVER_E};
use fanmark_core::derived::{derive, DeriveOptions, DerivedQuantity};
use fanmark_core::gate::SingleGate;
use fanmark_core::index::run::{IndexedState, StateClass};
use fanmark_core::line::{Family, Frame, FrameRect, Line, LineShape};
use fanmark_core::map::{Axis, ChannelKind, Map, Quantity};
use fanmark_core::palette::{by_name, PaletteKind};
use fanmark_core::rational::Rational;
use fanmark_core::reframe::{resample, FrameGrid};
use fanmark_core::{Error, Result};
use ndarray::{s, Array2};
use rayon::prelude::*;
use std::sync::Arc;

/// SI density per displayed density unit (10¹² cm⁻² = 10¹⁶ m⁻²).
pub const DENSITY_UNIT_M2: f64 = 1e16;

/// The plane the heat map is drawn in.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FrameKind {
    /// Gate voltage V_g (V) along x, B (T) along y: the map as measured.
    Gate,
    /// Density n (10¹² cm⁻²) along x, B (T) along y: needs a gate calibration.
    Density,
    /// Filling factor ν along x, B (T) along y: resampled, needs a calibration.
    Filling,
    /// Wannier plane n/n₀ along x, φ/φ₀ along y: resampled, needs a calibration and n₀.
    Wannier,
}

impl std::str::FromStr for FrameKind {
    type Err = Error;
    fn from_str(s: &str) -> Result<FrameKind> {
        match s {
            "gate" => Ok(FrameKind::Gate),
            "density" => Ok(FrameKind::Density),
            "filling" => Ok(FrameKind::Filling),
            "wannier" => Ok(FrameKind::Wannier),
            _ => Err(Error::invalid(
                "frame",
                format!("`{s}` is not a frame; use gate, density, filling or wannier"),
            )),
        }
    }
}

/// The colour scale asked for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum ScaleKind {
    /// Linear in the value.
    Linear,
    /// Logarithmic (positive values only).
    Log,
    /// Symmetric logarithm, linear near zero (threshold: a thirtieth of the colour limit).
    SymLog,
}

impl std::str::FromStr for ScaleKind {
    type Err = Error;
    fn from_str(s: &str) -> Result<ScaleKind> {
        match s {
            "linear" => Ok(ScaleKind::Linear),
            "log" => Ok(ScaleKind::Log),
            "symlog" => Ok(ScaleKind::SymLog),
            _ => Err(Error::invalid(
                "scale",
                format!("`{s}` is not a scale; use linear, log or symlog"),
            )),
        }
    }
}

/// Everything a figure of one map can be asked for. `Default` gives a good figure: R_xx on a
/// log scale with the sequential palette in the (V_g, B) frame, or (n, B) when a gate is known.
#[derive(Clone, Debug)]
pub struct FigureChoices {
    /// Channel: `rxx`, `rxy`, `sxx`, `sxy`, a derived short name (`drxx_dvg`, `drxx_dn`,
    /// `dsxy_dn`, `d2rxx_dn2`) or the name of any channel of the map.
    pub channel: String,
    /// Frame; `None`: density when a gate is known, else gate voltage.
    pub frame: Option<FrameKind>,
    /// Palette name; `None`: sequential for magnitudes, diverging for signed channels.
    pub palette: Option<String>,
    /// Colour scale; `None`: log for R_xx and σ_xx, symmetric log for signed derivatives
    /// (their charge-neutrality spike would take a linear range), linear otherwise.
    pub scale: Option<ScaleKind>,
    /// Colour range from these percentiles (lower, upper) of the shown values, 0…100. Signed
    /// channels use a symmetric range at the upper percentile of |value|. `None`: 1…99, and
    /// 99 of |value| for signed channels.
    pub clip_percent: Option<(f64, f64)>,
    /// Shown x range in the frame's display units (V, 10¹² cm⁻², ν or n/n₀).
    pub x_range: Option<(f64, f64)>,
    /// Shown y range in the frame's display units (T or φ/φ₀).
    pub y_range: Option<(f64, f64)>,
    /// Fixed colour range in the channel's display units (overrides `clip_percent`).
    pub v_range: Option<(f64, f64)>,
    /// Gate calibration n = α(V_g − V_CNP), α in m⁻²/V.
    pub gate: Option<SingleGate>,
    /// One carrier per moiré cell n₀, m⁻² (moiré devices).
    pub n0_m2: Option<f64>,
    /// Hall-bar geometry for σ from R.
    pub geometry: Option<SampleGeometry>,
    /// Predicted lines to overlay (drawn thin, dashed by family).
    pub lines: Vec<Line>,
    /// Detected states to overlay (solid, outlined, labelled, with a marker).
    pub states: Vec<IndexedState>,
    /// At most this many predicted lines get a label (the simplest fractions first); `None`:
    /// about ten per single-column width.
    pub label_limit: Option<usize>,
    /// At most this many detected states get a label (the strongest first); `None`: about
    /// twelve per single-column width.
    pub state_label_limit: Option<usize>,
    /// Figure width, mm.
    pub width_mm: f64,
    /// Figure height, mm.
    pub height_mm: f64,
    /// Raster resolution, dpi.
    pub dpi: f64,
    /// Title (markup allowed); `None` for none.
    pub title: Option<String>,
}

impl Default for FigureChoices {
    fn default() -> FigureChoices {
        FigureChoices {
            channel: "rxx".into(),
            frame: None,
            palette: None,
            scale: None,
            clip_percent: None,
            x_range: None,
            y_range: None,
            v_range: None,
            gate: None,
            n0_m2: None,
            geometry: None,
            lines: Vec::new(),
            states: Vec::new(),
            label_limit: None,
            state_label_limit: None,
            width_mm: 86.0,
            height_mm: 70.0,
            dpi: 300.0,
            title: None,
        }
    }
}

/// What the builder did that a user may want to know.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct BuildReport {
    /// Predicted lines with a visible part in the panel.
    pub lines_drawn: usize,
    /// Detected states with a visible part.
    pub states_drawn: usize,
    /// Lines that could not be drawn in this frame (e.g. moiré lines without n₀).
    pub lines_skipped: usize,
    /// The frame used.
    pub frame: Option<FrameKind>,
}

/// A channel's values with their display scaling and colour-bar label.
struct Shown {
    data: Array2<f64>,
    label: String,
    signed: bool,
    kind: ChannelKind,
}

/// Percentile `p` (0…100, nearest rank) of |value| over the finite values, exactly, in two
/// parallel passes without sorting or copying the map: the bit patterns of non-negative
/// doubles order like their values, so a histogram of their top 16 bits finds the bucket that
/// holds the rank, and only that bucket's values are then selected from.
fn percentile_abs(data: &Array2<f64>, p: f64) -> f64 {
    const BUCKETS: usize = 1 << 16;
    let bucket = |v: f64| (v.abs().to_bits() >> 48) as usize;
    let values: Vec<f64>;
    let slice = match data.as_slice_memory_order() {
        Some(s) => s,
        None => {
            values = data.iter().copied().collect();
            &values
        }
    };
    let hist = slice
        .par_chunks(1 << 16)
        .map(|chunk| {
            let mut h = vec![0u64; BUCKETS];
            for &v in chunk.iter().filter(|v| v.is_finite()) {
                h[bucket(v)] += 1;
            }
            h
        })
        .reduce(
            || vec![0u64; BUCKETS],
            |mut a, b| {
                a.iter_mut().zip(&b).for_each(|(x, y)| *x += y);
                a
            },
        );
    let total: u64 = hist.iter().sum();
    if total == 0 {
        return f64::NAN;
    }
    let k = (((p / 100.0) * (total - 1) as f64).round() as u64).min(total - 1);
    let (mut below, mut target) = (0u64, 0usize);
    for (b, &count) in hist.iter().enumerate() {
        if below + count > k {
            target = b;
            break;
        }
        below += count;
    }
    let mut inside: Vec<f64> = slice
        .par_iter()
        .filter(|v| v.is_finite() && bucket(**v) == target)
        .map(|v| v.abs())
        .collect();
    let r = ((k - below) as usize).min(inside.len().saturating_sub(1));
    match inside.is_empty() {
        true => f64::NAN,
        false => *inside.select_nth_unstable_by(r, f64::total_cmp).1,
    }
}

/// Percentile `p` of |value| over at most about `samples` finite values taken at a fixed
/// stride through the map (for choices that need only its order of magnitude).
fn percentile_abs_sampled(data: &Array2<f64>, p: f64, samples: usize) -> f64 {
    let stride = (data.len() / samples.max(1)).max(1);
    let mut v: Vec<f64> = data
        .iter()
        .step_by(stride)
        .filter(|x| x.is_finite())
        .map(|x| x.abs())
        .collect();
    if v.is_empty() {
        return f64::NAN;
    }
    let k = (((p / 100.0) * (v.len() - 1) as f64).round() as usize).min(v.len() - 1);
    let (_, x, _) = v.select_nth_unstable_by(k, f64::total_cmp);
    *x
}

/// The channel to show, in display units.
fn shown_channel(map: &Map, c: &FigureChoices) -> Result<Shown> {
    let opts = DeriveOptions {
        gate: c.gate,
        geometry: c.geometry,
        ..DeriveOptions::default()
    };
    let name = c.channel.as_str();
    let channel = match name {
        "rxx" => map.require(ChannelKind::Rxx)?.clone(),
        "rxy" => map.require(ChannelKind::Rxy)?.clone(),
        "sxx" | "sxy" => {
            let kind = if name == "sxx" {
                ChannelKind::SigmaXx
            } else {
                ChannelKind::SigmaXy
            };
            match map.channel_of(kind) {
                Some(ch) => ch.clone(),
                None => derive(
                    map,
                    DerivedQuantity::from_short_name(name).unwrap_or(DerivedQuantity::Sxx),
                    &opts,
                )?,
            }
        }
        _ => match DerivedQuantity::from_short_name(name) {
            Some(q) => derive(map, q, &opts)?,
            None => map.channel(name).cloned().ok_or_else(|| {
                Error::invalid(
                    "channel",
                    format!(
                        "`{name}` is neither a channel of the map ({}) nor a derived channel ({})",
                        map.channel_names(),
                        DerivedQuantity::ALL
                            .iter()
                            .map(|q| q.short_name())
                            .collect::<Vec<_>>()
                            .join(", ")
                    ),
                )
            })?,
        },
    };
    // Only the display unit depends on it: a strided sample of the map is enough.
    let big = percentile_abs_sampled(&channel.data, 99.0, 1 << 16);
    let ohm = |sym: &str, per: &str| -> (f64, String) {
        if big >= 1e3 {
            (1e-3, format!("{sym} (kΩ{per})"))
        } else {
            (1.0, format!("{sym} (Ω{per})"))
        }
    };
    let (factor, label, signed) = match name {
        "rxx" => {
            let (f, l) = ohm("R_{xx}", "");
            (f, l, false)
        }
        "rxy" => {
            let (f, l) = ohm("R_{xy}", "");
            (f, l, true)
        }
        "sxx" => (1.0 / E2_OVER_H, "σ_{xx} (e^2/h)".to_string(), false),
        "sxy" => (1.0 / E2_OVER_H, "σ_{xy} (e^2/h)".to_string(), true),
        "drxx_dvg" => {
            let (f, l) = ohm("dR_{xx}/dV_g", "/V");
            (f, l, true)
        }
        "drxx_dn" => {
            let b = big * DENSITY_UNIT_M2;
            if b >= 1e3 {
                (
                    DENSITY_UNIT_M2 * 1e-3,
                    "dR_{xx}/dn (kΩ per 10^{12} cm^{−2})".to_string(),
                    true,
                )
            } else {
                (
                    DENSITY_UNIT_M2,
                    "dR_{xx}/dn (Ω per 10^{12} cm^{−2})".to_string(),
                    true,
                )
            }
        }
        "d2rxx_dn2" => (
            DENSITY_UNIT_M2 * DENSITY_UNIT_M2,
            "d^2R_{xx}/dn^2 (Ω per (10^{12} cm^{−2})^2)".to_string(),
            true,
        ),
        "dsxy_dn" => (
            DENSITY_UNIT_M2 / E2_OVER_H,
            "dσ_{xy}/dn (e^2/h per 10^{12} cm^{−2})".to_string(),
            true,
        ),
        other => {
            let unit = if channel.unit.is_empty() {
                String::new()
            } else {
                format!(" ({})", channel.unit)
            };
            let signed = channel.data.iter().any(|v| *v < 0.0);
            (1.0, format!("{other}{unit}"), signed)
        }
    };
    let kind = channel.kind;
    let mut data = channel.data;
    if factor != 1.0 {
        data.par_mapv_inplace(|v| v * factor);
    }
    Ok(Shown {
        data,
        label,
        signed,
        kind,
    })
}

/// The map's density axis and data, (n, B) orientation, from a gate or density x axis.
fn density_map(
    map: &Map,
    data: &Array2<f64>,
    gate: Option<SingleGate>,
) -> Result<(Axis, Array2<f64>)> {
    match map.x().quantity {
        Quantity::Density => Ok((map.x().clone(), data.clone())),
        Quantity::Gate => {
            let g = need_gate(gate, "this frame")?;
            let mut n: Vec<f64> = map.x().values().iter().map(|&v| g.density(v)).collect();
            if g.alpha_m2_per_v < 0.0 {
                n.reverse();
                Ok((
                    Axis::new("n", Quantity::Density, n)?,
                    data.slice(s![.., ..;-1]).to_owned(),
                ))
            } else {
                Ok((Axis::new("n", Quantity::Density, n)?, data.clone()))
            }
        }
        q => Err(Error::MapRequirement(format!(
            "the map's x axis measures {q:?}; frames need gate voltage or density along x"
        ))),
    }
}

fn need_gate(gate: Option<SingleGate>, what: &str) -> Result<SingleGate> {
    gate.filter(|g| g.alpha_m2_per_v.is_finite() && g.alpha_m2_per_v != 0.0)
        .ok_or_else(|| {
            Error::invalid(
                "calibration",
                format!("{what} needs a gate calibration (α and V_CNP)"),
            )
        })
}

fn need_n0(n0: Option<f64>, what: &str) -> Result<f64> {
    n0.filter(|v| v.is_finite() && *v > 0.0).ok_or_else(|| {
        Error::invalid(
            "moiré density",
            format!("{what} needs the moiré density n₀ (one carrier per moiré cell)"),
        )
    })
}

fn range_of(v: &[f64]) -> (f64, f64) {
    let (a, b) = (v[0], v[v.len() - 1]);
    (a.min(b), a.max(b))
}

fn check_range(r: (f64, f64), what: &str) -> Result<(f64, f64)> {
    if r.0.is_finite() && r.1.is_finite() && r.0 != r.1 {
        Ok((r.0.min(r.1), r.0.max(r.1)))
    } else {
        Err(Error::invalid(
            what,
            format!("expected two different finite limits, got {}, {}", r.0, r.1),
        ))
    }
}

/// Grid size for a resampled frame: about the data's own resolution, bounded.
fn resample_size(n: usize, lo: usize, hi: usize) -> usize {
    n.clamp(lo, hi)
}

/// Heat-map grid, frame, axes and the display → SI scale of x and y.
struct Plane {
    x: Vec<f64>,
    y: Vec<f64>,
    values: Array2<f64>,
    frame: Option<Frame>,
    x_label: String,
    y_label: String,
    /// SI frame coordinate per display unit, x and y.
    x_si: f64,
    y_si: f64,
    top: Option<SecondaryAxis>,
    right: Option<SecondaryAxis>,
}

fn plane(map: &Map, shown: Array2<f64>, c: &FigureChoices, kind: FrameKind) -> Result<Plane> {
    if map.y().quantity != Quantity::Field {
        return Err(Error::MapRequirement(format!(
            "figures need the field B along y; the map's y axis `{}` measures {:?}",
            map.y().name,
            map.y().quantity
        )));
    }
    let b = map.y().values().to_vec();
    let n0 = c.n0_m2.filter(|v| v.is_finite() && *v > 0.0);
    let phi = |n0: f64| FLUX_QUANTUM_H_OVER_E * n0;
    match kind {
        FrameKind::Gate => {
            if map.x().quantity != Quantity::Gate {
                return Err(Error::MapRequirement(format!(
                    "the gate frame needs a gate-voltage x axis; the map's `{}` measures {:?} (use --frame density)",
                    map.x().name,
                    map.x().quantity
                )));
            }
            let frame = match c.gate {
                Some(g) => Some(Frame::gate_field(g, n0)?),
                None => None,
            };
            let top = c.gate.map(|g| SecondaryAxis {
                label: "n (10^{12} cm^{−2})".into(),
                map: Arc::new(move |v: f64| g.density(v) / DENSITY_UNIT_M2),
            });
            Ok(Plane {
                x: map.x().values().to_vec(),
                y: b,
                values: shown,
                frame,
                x_label: "V_g (V)".into(),
                y_label: "B (T)".into(),
                x_si: 1.0,
                y_si: 1.0,
                top,
                right: None,
            })
        }
        FrameKind::Density => {
            let x: Vec<f64> = match map.x().quantity {
                Quantity::Density => map.x().values().to_vec(),
                Quantity::Gate => {
                    let g = need_gate(c.gate, "the density frame")?;
                    map.x().values().iter().map(|&v| g.density(v)).collect()
                }
                q => {
                    return Err(Error::MapRequirement(format!(
                        "the density frame needs a gate or density x axis, not {q:?}"
                    )))
                }
            };
            let x = x.into_iter().map(|v| v / DENSITY_UNIT_M2).collect();
            let (top, right) = match n0 {
                Some(n0) => (
                    Some(SecondaryAxis {
                        label: "n/n_0".into(),
                        map: Arc::new(move |v: f64| v * DENSITY_UNIT_M2 / n0),
                    }),
                    Some(SecondaryAxis {
                        label: "φ/φ_0".into(),
                        map: Arc::new(move |bv: f64| bv / phi(n0)),
                    }),
                ),
                None => (None, None),
            };
            Ok(Plane {
                x,
                y: b,
                values: shown,
                frame: Some(Frame::density_field(n0)?),
                x_label: "n (10^{12} cm^{−2})".into(),
                y_label: "B (T)".into(),
                x_si: DENSITY_UNIT_M2,
                y_si: 1.0,
                top,
                right,
            })
        }
        FrameKind::Filling => {
            let (n_axis, data) = density_map(map, &shown, c.gate)?;
            let b_axis = map.y();
            let (nlo, nhi) = (n_axis.min(), n_axis.max());
            let bmax = b_axis.max();
            if bmax.is_nan() || bmax <= 0.0 {
                return Err(Error::MapRequirement(
                    "the filling-factor frame needs positive fields".into(),
                ));
            }
            let (ylo, yhi) = match c.y_range {
                Some(r) => check_range(r, "y range")?,
                None => (b_axis.min().max(bmax / 4.0), bmax),
            };
            if ylo.is_nan() || ylo <= 0.0 {
                return Err(Error::invalid(
                    "y range",
                    "the filling-factor frame needs a field range above 0 T",
                ));
            }
            let (xlo, xhi) = match c.x_range {
                Some(r) => check_range(r, "x range")?,
                None => (nlo / (E_OVER_H * ylo), nhi / (E_OVER_H * ylo)),
            };
            let frame = Frame::filling_field(n0)?;
            let grid = FrameGrid::new(
                FrameRect::new(xlo, xhi, ylo, yhi)?,
                resample_size(n_axis.len(), 400, 2000),
                resample_size(b_axis.len(), 300, 1500),
            )?;
            let values = resample(&n_axis, b_axis, &data, &frame, &grid)?;
            Ok(Plane {
                x: grid.xs(),
                y: grid.ys(),
                values,
                frame: Some(frame),
                x_label: "ν".into(),
                y_label: "B (T)".into(),
                x_si: 1.0,
                y_si: 1.0,
                top: None,
                right: None,
            })
        }
        FrameKind::Wannier => {
            let n0 = need_n0(n0, "the Wannier frame")?;
            let (n_axis, data) = density_map(map, &shown, c.gate)?;
            let b_axis = map.y();
            let (xlo, xhi) = match c.x_range {
                Some(r) => check_range(r, "x range")?,
                None => (n_axis.min() / n0, n_axis.max() / n0),
            };
            let (ylo, yhi) = match c.y_range {
                Some(r) => check_range(r, "y range")?,
                None => (b_axis.min() / phi(n0), b_axis.max() / phi(n0)),
            };
            let frame = Frame::wannier(n0)?;
            let grid = FrameGrid::new(
                FrameRect::new(xlo, xhi, ylo, yhi)?,
                resample_size(n_axis.len(), 200, 2000),
                resample_size(b_axis.len(), 200, 1500),
            )?;
            let values = resample(&n_axis, b_axis, &data, &frame, &grid)?;
            let right = Some(SecondaryAxis {
                label: "B (T)".into(),
                map: Arc::new(move |y: f64| y * phi(n0)),
            });
            Ok(Plane {
                x: grid.xs(),
                y: grid.ys(),
                values,
                frame: Some(frame),
                x_label: "n/n_0".into(),
                y_label: "φ/φ_0".into(),
                x_si: 1.0,
                y_si: 1.0,
                top: None,
                right,
            })
        }
    }
}

/// A short label for a line: the filling `2/3` or `−2`, `(t, s)` for moiré lines, `p/q` for a
/// Brown–Zak field (the legend and the axes say which is which).
pub fn short_label(shape: &LineShape) -> String {
    let t = |r: Rational| fanmark_core::line::signed_text(r);
    match *shape {
        LineShape::Gap { t: tt, s } if s.is_zero() => t(tt),
        LineShape::Gap { t: tt, s } => format!("({}, {})", t(tt), t(s)),
        LineShape::ConstantFlux { flux } => t(flux),
    }
}

/// Order of preference for labelling predicted lines: integer before fractional, small
/// denominators and small |t| first, s = 0 before moiré lines.
fn label_rank(l: &Line) -> (i64, i64, i64, i64) {
    match l.shape {
        LineShape::Gap { t, s } => (
            t.denom().max(s.denom()),
            i64::from(!s.is_zero()),
            t.numer().abs() * 1000 / t.denom(),
            s.numer().abs(),
        ),
        LineShape::ConstantFlux { flux } => (flux.denom(), 2, flux.numer().abs(), 0),
    }
}

/// Anchor candidates for a label along a polyline in display units: from the end where the line
/// leaves the panel (its last point) back towards its start.
fn anchors_along(points: &[(f64, f64)]) -> Vec<(f64, f64)> {
    if points.len() < 2 {
        return points.to_vec();
    }
    let seg_len: Vec<f64> = points
        .windows(2)
        .map(|w| (w[1].0 - w[0].0).hypot(w[1].1 - w[0].1))
        .collect();
    let total: f64 = seg_len.iter().sum();
    let at = |f: f64| {
        let mut d = f * total;
        for (k, &l) in seg_len.iter().enumerate() {
            if d <= l || k == seg_len.len() - 1 {
                let u = if l > 0.0 { (d / l).min(1.0) } else { 0.0 };
                let (a, b) = (points[k], points[k + 1]);
                return (a.0 + u * (b.0 - a.0), a.1 + u * (b.1 - a.1));
            }
            d -= l;
        }
        points[points.len() - 1]
    };
    [1.0, 0.94, 0.88, 0.8, 0.7, 0.6, 0.5, 0.4, 0.3]
        .iter()
        .map(|&f| at(f))
        .collect()
}

fn family_title(f: Family) -> &'static str {
    match f {
        Family::Integer => "integer",
        Family::BrokenSymmetry => "broken symmetry",
        Family::CompositeFermion => "fractional",
        Family::Satellite => "satellite",
        Family::Wannier => "Wannier (t, s)",
        Family::BrownZak => "Brown–Zak",
    }
}

fn state_shape(st: &IndexedState) -> LineShape {
    LineShape::Gap { t: st.t, s: st.s }
}

/// The corner of the plot whose quarter-sized region the overlay lines cross least (samples
/// along each line), so the legend hides as little as possible.
fn emptiest_corner(p: &Panel) -> Corner {
    let (x0, x1) = p.x_axis.range;
    let (y0, y1) = p.y_axis.range;
    let fx = |x: f64| (x - x0) / (x1 - x0);
    let fy = |y: f64| (y - y0) / (y1 - y0);
    let corners = [
        (Corner::TopLeft, false, true),
        (Corner::TopRight, true, true),
        (Corner::BottomLeft, false, false),
        (Corner::BottomRight, true, false),
    ];
    let mut counts = [0usize; 4];
    for l in &p.lines {
        for w in l.points.windows(2) {
            for k in 0..8 {
                let t = k as f64 / 8.0;
                let (u, v) = (
                    fx(w[0].0 + t * (w[1].0 - w[0].0)),
                    fy(w[0].1 + t * (w[1].1 - w[0].1)),
                );
                for (i, &(_, right, top)) in corners.iter().enumerate() {
                    let in_x = if right { u > 0.6 } else { u < 0.4 };
                    let in_y = if top { v > 0.65 } else { v < 0.35 };
                    if in_x && in_y {
                        counts[i] += 1;
                    }
                }
            }
        }
    }
    let best = (0..4).min_by_key(|&i| counts[i]).unwrap_or(0);
    corners[best].0
}

/// Build the single panel of `map` with `choices`, and what was drawn.
pub fn build_panel(map: &Map, c: &FigureChoices) -> Result<(Panel, BuildReport)> {
    let kind = c.frame.unwrap_or(
        if c.gate.is_some() || map.x().quantity == Quantity::Density {
            FrameKind::Density
        } else {
            FrameKind::Gate
        },
    );
    let mut shown = shown_channel(map, c)?;
    let pl = plane(map, std::mem::take(&mut shown.data), c, kind)?;
    let x_range = match (c.x_range, kind) {
        (Some(r), FrameKind::Gate | FrameKind::Density) => check_range(r, "x range")?,
        _ => range_of(&pl.x),
    };
    let y_range = match (c.y_range, kind) {
        (Some(r), FrameKind::Gate | FrameKind::Density) => check_range(r, "y range")?,
        _ => range_of(&pl.y),
    };

    // Colours.
    let magnitude = !shown.signed;
    let derivative = c.channel.starts_with('d');
    let scale_kind = c.scale.unwrap_or(
        if magnitude && matches!(shown.kind, ChannelKind::Rxx | ChannelKind::SigmaXx) {
            ScaleKind::Log
        } else if derivative && shown.signed {
            ScaleKind::SymLog
        } else {
            ScaleKind::Linear
        },
    );
    let palette_name = c
        .palette
        .clone()
        .unwrap_or_else(|| if magnitude { "kiln" } else { "seesaw" }.to_string());
    let palette = by_name(&palette_name)?;
    let colors: Vec<[u8; 3]> = (0..256).map(|i| palette.sample(i as f64 / 255.0)).collect();
    let (plo, phi) = c.clip_percent.unwrap_or((1.0, 99.0));
    if !(0.0..=100.0).contains(&plo) || !(0.0..=100.0).contains(&phi) || plo >= phi {
        return Err(Error::invalid(
            "clip percentiles",
            format!("expected 0 ≤ LO < HI ≤ 100, got {plo}, {phi}"),
        ));
    }
    let symmetric = shown.signed || palette.kind() == PaletteKind::Diverging;
    let range = match c.v_range {
        Some((a, b)) => ValueRange::Fixed(a, b),
        None if symmetric && scale_kind != ScaleKind::Log => {
            let l = percentile_abs(&pl.values, phi);
            if l.is_finite() && l > 0.0 {
                ValueRange::Fixed(-l, l)
            } else {
                ValueRange::Percentile(plo, phi)
            }
        }
        None => ValueRange::Percentile(plo, phi),
    };
    let scale = match scale_kind {
        ScaleKind::Linear => ColorScale::Linear,
        ScaleKind::Log => ColorScale::Log,
        ScaleKind::SymLog => {
            let l = match range {
                ValueRange::Fixed(a, b) => a.abs().max(b.abs()),
                ValueRange::Percentile(_, p) => percentile_abs(&pl.values, p),
            };
            // Linear within the typical (median) magnitude, bounded to [L/1000, L/3].
            let typical = percentile_abs(&pl.values, 50.0);
            ColorScale::SymLog {
                linear_threshold: if l.is_finite() && l > 0.0 {
                    typical.clamp(l / 1000.0, l / 3.0)
                } else {
                    1.0
                },
            }
        }
    };

    let mut values = pl.values;
    if scale == ColorScale::Log {
        // Noise takes small resistances below zero; draw them at the low end of the scale
        // instead of as missing data.
        let mut positive: Vec<f64> = values
            .iter()
            .copied()
            .filter(|v| v.is_finite() && *v > 0.0)
            .collect();
        if !positive.is_empty() {
            let k = ((plo / 100.0 * (positive.len() - 1) as f64).round() as usize)
                .min(positive.len() - 1);
            let (_, f, _) = positive.select_nth_unstable_by(k, f64::total_cmp);
            let floor = *f;
            values.mapv_inplace(|v| if v.is_finite() && v <= 0.0 { floor } else { v });
        }
    }
    let mut panel = Panel::new(
        AxisSpec {
            label: pl.x_label.clone(),
            range: x_range,
        },
        AxisSpec {
            label: pl.y_label.clone(),
            range: y_range,
        },
    );
    panel.top_axis = pl.top.clone();
    panel.right_axis = pl.right.clone();
    panel.heatmap = Some(HeatMap {
        values,
        x: pl.x,
        y: pl.y,
        colors,
        scale,
        range,
        resample: Resample::Bilinear,
        missing: Some([236, 236, 236]),
    });
    panel.colorbar = Some(ColorBar {
        label: shown.label,
        width_mm: 2.5,
    });

    let mut report = BuildReport {
        frame: Some(kind),
        ..BuildReport::default()
    };
    let want_overlay = !c.lines.is_empty() || !c.states.is_empty();
    let frame = match pl.frame {
        Some(f) => Some(f),
        None if want_overlay => {
            return Err(Error::invalid(
                "calibration",
                "overlay lines and states need a gate calibration (α and V_CNP) to be placed",
            ))
        }
        None => None,
    };
    if let Some(frame) = frame {
        let rect_si = FrameRect::new(
            x_range.0 * pl.x_si,
            x_range.1 * pl.x_si,
            y_range.0 * pl.y_si,
            y_range.1 * pl.y_si,
        )?;
        let to_display = |seg: &fanmark_core::line::Segment| -> Vec<(f64, f64)> {
            seg.points
                .iter()
                .map(|p| (p.x / pl.x_si, p.y / pl.y_si))
                .collect()
        };
        let columns = (c.width_mm / 86.0).max(0.5);
        let label_limit = c.label_limit.unwrap_or((10.0 * columns).round() as usize);
        let state_label_limit = c
            .state_label_limit
            .unwrap_or((12.0 * columns).round() as usize);
        let detected: Vec<(Rational, Rational)> = c.states.iter().map(|s| (s.t, s.s)).collect();
        let mut families: Vec<Family> = Vec::new();
        // Predicted lines, simplest first for labelling.
        let mut order: Vec<usize> = (0..c.lines.len()).collect();
        order.sort_by_key(|&i| label_rank(&c.lines[i]));
        let mut predicted_labels = Vec::new();
        for &i in &order {
            let line = &c.lines[i];
            let segs = match frame.clip(line, &rect_si) {
                Ok(s) => s,
                Err(_) => {
                    report.lines_skipped += 1;
                    continue;
                }
            };
            if segs.is_empty() {
                continue;
            }
            report.lines_drawn += 1;
            if !families.contains(&line.family) {
                families.push(line.family);
            }
            let style = line_style(line.family, Role::Predicted);
            let mut longest: Vec<(f64, f64)> = Vec::new();
            for seg in &segs {
                let pts = to_display(seg);
                if pts.len() > longest.len() {
                    longest = pts.clone();
                }
                panel.lines.push(Polyline {
                    points: pts,
                    style: style.clone(),
                });
            }
            let found = line.ts().is_some_and(|ts| detected.contains(&ts));
            if !found && predicted_labels.len() < label_limit {
                let (fill, outline) = (style.color, [0u8, 0, 0]);
                predicted_labels.push(TextLabel {
                    text: short_label(&line.shape),
                    anchors: anchors_along(&longest),
                    color: outline,
                    size_pt: 5.0,
                    background: Some(fill),
                });
            }
        }
        // Detected states, strongest first, over the field range where each is seen.
        let mut states: Vec<&IndexedState> = c.states.iter().collect();
        states.sort_by(|a, b| b.score.total_cmp(&a.score));
        let mut kinds: Vec<StateClass> = Vec::new();
        let mut state_labels = Vec::new();
        for st in states {
            let fam = state_family(st.kind);
            let line = Line::gap(fam, "detected", st.t, st.s);
            let (b_lo, b_hi) = (
                st.b_onset_t.unwrap_or(y_range.0 * pl.y_si),
                st.b_max_t.unwrap_or(f64::INFINITY),
            );
            let y_lo = frame.y_of_field(b_lo).unwrap_or(rect_si.y_min);
            let y_hi = frame.y_of_field(b_hi).unwrap_or(rect_si.y_max);
            let (ya, yb) = (
                y_lo.min(y_hi).max(rect_si.y_min),
                y_lo.max(y_hi).min(rect_si.y_max),
            );
            if ya.is_nan() || yb.is_nan() || ya >= yb {
                continue;
            }
            let seen = FrameRect::new(rect_si.x_min, rect_si.x_max, ya, yb)?;
            let segs = match frame.clip(&line, &seen) {
                Ok(s) if !s.is_empty() => s,
                Ok(_) => continue,
                Err(_) => {
                    report.lines_skipped += 1;
                    continue;
                }
            };
            report.states_drawn += 1;
            if !kinds.contains(&st.kind) {
                kinds.push(st.kind);
            }
            let labelled = state_labels.len() < state_label_limit;
            let style = line_style(
                fam,
                if labelled {
                    Role::Detected
                } else {
                    Role::DetectedWeak
                },
            );
            let mut longest: Vec<(f64, f64)> = Vec::new();
            for seg in &segs {
                let pts = to_display(seg);
                if pts.len() > longest.len()
                    || (pts.len() == longest.len() && pts.last() > longest.last())
                {
                    longest = pts.clone();
                }
                panel.lines.push(Polyline {
                    points: pts,
                    style: style.clone(),
                });
            }
            if labelled {
                if let Some(&end) = longest.last() {
                    panel.markers.push(Markers {
                        points: vec![end],
                        style: state_marker(st.kind),
                    });
                }
                state_labels.push(TextLabel {
                    text: short_label(&state_shape(st)),
                    anchors: anchors_along(&longest),
                    color: [0, 0, 0],
                    size_pt: 5.5,
                    background: Some([255, 255, 255]),
                });
            }
        }
        // Found states are labelled first; predictions fill the space left.
        panel.labels = state_labels;
        panel.labels.extend(predicted_labels);
        // One legend entry per family drawn: the found-state marker when the family has
        // found states, else the predicted stroke.
        for k in &kinds {
            let f = state_family(*k);
            if !families.contains(&f) {
                families.push(f);
            }
        }
        families.sort();
        let entries: Vec<LegendEntry> = families
            .iter()
            .map(|&f| {
                let found = kinds.iter().find(|k| state_family(**k) == f);
                LegendEntry {
                    swatch: match found {
                        Some(k) => Swatch::Marker(state_marker(*k)),
                        None => Swatch::Line(line_style(f, Role::Predicted)),
                    },
                    text: family_title(f).to_string(),
                }
            })
            .collect();
        if !entries.is_empty() {
            panel.legend = Some(Legend {
                entries,
                corner: emptiest_corner(&panel),
            });
        }
    }
    Ok((panel, report))
}

/// Build the whole figure: one panel, size, resolution and title from `choices`.
pub fn build_figure(map: &Map, c: &FigureChoices) -> Result<(Figure, BuildReport)> {
    let (panel, report) = build_panel(map, c)?;
    let mut fig = Figure::new(c.width_mm, c.height_mm);
    fig.dpi = c.dpi;
    fig.title = c.title.clone().unwrap_or_default();
    fig.font_pt = if c.width_mm < 120.0 { 7.0 } else { 8.0 };
    fig.panels.push(panel);
    Ok((fig, report))
}

#[cfg(test)]
mod tests {
    #[test]
    fn histogram_percentile_equals_direct_selection() {
        let mut seed = 5u64;
        let mut rnd = move || {
            seed ^= seed << 13;
            seed ^= seed >> 7;
            seed ^= seed << 17;
            (seed >> 11) as f64 / (1u64 << 53) as f64
        };
        for (rows, cols) in [(1, 1), (3, 7), (40, 300), (200, 900)] {
            let data = Array2::from_shape_fn((rows, cols), |(i, j)| match (i * cols + j) % 17 {
                0 => f64::NAN,
                1 => 0.0,
                2 => -1e-9 * rnd(),
                _ => (rnd() - 0.5) * 10f64.powf(6.0 * rnd() - 3.0),
            });
            for p in [0.0, 1.0, 25.0, 50.0, 90.0, 99.0, 100.0] {
                let want = percentile_abs_sampled(&data, p, data.len());
                let got = percentile_abs(&data, p);
                assert!(
                    got == want || (got.is_nan() && want.is_nan()),
                    "{rows}×{cols} p {p}: {got} vs {want}"
                );
            }
        }
    }

    use super::*;
    use fanmark_core::map::Channel;

    const ALPHA: f64 = 7.2e14; // m⁻²/V (about 285 nm SiO₂)
    const N0: f64 = 2.4e16; // m⁻²

    fn r(p: i64, q: i64) -> Rational {
        Rational::new(p, q).unwrap()
    }

    /// A (V_g, B) map with R_xx dips along ν = ±2, ±6 and R_xy = −B/(n e) (classical Hall).
    fn fan() -> Map {
        let x = Axis::uniform("vg", Quantity::Gate, -40.0, 0.4, 201).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 0.0, 0.1, 91).unwrap();
        let g = SingleGate {
            alpha_m2_per_v: ALPHA,
            v_cnp: 1.0,
        };
        let (xv, yv) = (x.values().to_vec(), y.values().to_vec());
        let rxx = Array2::from_shape_fn((91, 201), |(i, j)| {
            let n = g.density(xv[j]);
            let nu = n / (E_OVER_H * yv[i].max(0.05));
            let dip: f64 = [-6.0, -2.0, 2.0, 6.0]
                .iter()
                .map(|c| (-(nu - c) * (nu - c) / 0.2).exp())
                .sum();
            2000.0 * (1.0 - 0.9 * dip.min(1.0)) + 50.0
        });
        let rxy = Array2::from_shape_fn((91, 201), |(i, j)| {
            let n = g.density(xv[j]);
            let n = if n.abs() < 1e14 { 1e14 } else { n };
            -yv[i] / (n * 1.602_176_634e-19)
        });
        let mut m = Map::new(x, y);
        m.add_channel(Channel::new("rxx", ChannelKind::Rxx, rxx))
            .unwrap();
        m.add_channel(Channel::new("rxy", ChannelKind::Rxy, rxy))
            .unwrap();
        m
    }

    fn gate() -> SingleGate {
        SingleGate {
            alpha_m2_per_v: ALPHA,
            v_cnp: 1.0,
        }
    }

    fn state(t: i64, kind: StateClass, score: f64) -> IndexedState {
        IndexedState {
            kind,
            t: Rational::integer(t),
            s: Rational::ZERO,
            nu: Some(Rational::integer(t)),
            score,
            t_stat: 10.0,
            b_onset_t: Some(2.0),
            b_max_t: Some(9.0),
            hall_check: None,
            confidence: 1.0,
            flags: Vec::new(),
        }
    }

    #[test]
    fn default_figure_is_rxx_on_a_log_scale_in_the_gate_frame() {
        let (fig, rep) = build_figure(&fan(), &FigureChoices::default()).unwrap();
        let p = &fig.panels[0];
        assert_eq!(rep.frame, Some(FrameKind::Gate));
        assert_eq!(p.x_axis.label, "V_g (V)");
        assert_eq!(p.y_axis.label, "B (T)");
        let hm = p.heatmap.as_ref().unwrap();
        assert_eq!(hm.scale, ColorScale::Log);
        assert_eq!(hm.range, ValueRange::Percentile(1.0, 99.0));
        // 2050 Ω peaks are shown in kΩ.
        assert!(p.colorbar.as_ref().unwrap().label.contains("kΩ"));
        assert!((hm.values.iter().cloned().fold(0.0, f64::max) - 2.05).abs() < 1e-9);
        assert_eq!(p.x_axis.range, (-40.0, 40.0));
        assert!(p.top_axis.is_none() && p.lines.is_empty() && p.legend.is_none());
        // The figure lays out and renders.
        let png = super::super::encode(&fig, super::super::Format::Png).unwrap();
        assert_eq!(&png[1..4], b"PNG");
    }

    #[test]
    fn a_calibration_switches_to_density_with_lines_clipped_and_labelled() {
        let lines: Vec<Line> = [-6, -2, 2, 6, 10]
            .iter()
            .map(|&nu| {
                Line::gap(
                    Family::Integer,
                    "test",
                    Rational::integer(nu),
                    Rational::ZERO,
                )
            })
            .chain([Line::gap(
                Family::CompositeFermion,
                "test",
                r(1, 3),
                Rational::ZERO,
            )])
            .collect();
        let c = FigureChoices {
            gate: Some(gate()),
            lines,
            states: vec![
                state(2, StateClass::Integer, 40.0),
                state(-6, StateClass::Integer, 30.0),
            ],
            ..FigureChoices::default()
        };
        let (fig, rep) = build_figure(&fan(), &c).unwrap();
        let p = &fig.panels[0];
        assert_eq!(rep.frame, Some(FrameKind::Density));
        assert_eq!(p.x_axis.label, "n (10^{12} cm^{−2})");
        // x range = α (V_g − V_CNP) in 10¹² cm⁻²: α·(−41 V) = −2.952.
        assert!((p.x_axis.range.0 - ALPHA * -41.0 / 1e16).abs() < 1e-9);
        assert_eq!(rep.lines_drawn, 6);
        assert_eq!(rep.states_drawn, 2);
        for l in &p.lines {
            for &(x, y) in &l.points {
                assert!(x >= p.x_axis.range.0 - 1e-9 && x <= p.x_axis.range.1 + 1e-9);
                assert!((0.0..=9.0 + 1e-9).contains(&y));
            }
        }
        // ν = 2 leaves the top at n = 2 (e/h)(9 T) = 4.353e15 m⁻² = 0.4353 × 10¹² cm⁻².
        let nu2 = p.lines.iter().find(|l| {
            l.style.outline.is_none() && l.points[0].0 >= 0.0 && {
                let e = l.points[l.points.len() - 1];
                (e.0 - 0.4353).abs() < 1e-3
            }
        });
        assert!(nu2.is_some(), "ν = 2 must end at n = 0.4353 at 9 T");
        // Detected states are labelled first, with a marker, then the simplest predictions.
        let texts: Vec<&str> = p.labels.iter().map(|l| l.text.as_str()).collect();
        assert_eq!(&texts[..2], ["2", "−6"]);
        assert!(texts.contains(&"1/3"));
        assert_eq!(p.markers.len(), 2);
        let legend: Vec<&str> = p
            .legend
            .as_ref()
            .unwrap()
            .entries
            .iter()
            .map(|e| e.text.as_str())
            .collect();
        assert_eq!(legend, ["integer", "fractional"]);
        assert!(matches!(
            p.legend.as_ref().unwrap().entries[0].swatch,
            Swatch::Marker(_)
        ));
        // The found ν = 2 is not labelled a second time as a prediction.
        assert_eq!(texts.iter().filter(|t| **t == "2").count(), 1);
    }

    #[test]
    fn signed_derivatives_get_a_symmetric_diverging_range() {
        let c = FigureChoices {
            channel: "drxx_dn".into(),
            gate: Some(gate()),
            ..FigureChoices::default()
        };
        let (fig, _) = build_figure(&fan(), &c).unwrap();
        let hm = fig.panels[0].heatmap.as_ref().unwrap();
        assert!(matches!(hm.scale, ColorScale::SymLog { .. }));
        match hm.range {
            ValueRange::Fixed(a, b) => assert!(a < 0.0 && (a + b).abs() < 1e-12),
            other => panic!("expected a symmetric range, got {other:?}"),
        }
        let seesaw = by_name("seesaw").unwrap();
        assert_eq!(hm.colors[0], seesaw.sample(0.0));
        assert!(fig.panels[0]
            .colorbar
            .as_ref()
            .unwrap()
            .label
            .contains("per 10^{12}"));
        // Without a gate model the derivative in n cannot be taken: a clear error.
        let e = build_figure(&fan(), &FigureChoices { gate: None, ..c }).unwrap_err();
        assert!(e.to_string().contains("gate"), "{e}");
    }

    #[test]
    fn filling_and_wannier_frames_resample_and_need_what_they_need() {
        let c = FigureChoices {
            frame: Some(FrameKind::Filling),
            gate: Some(gate()),
            ..FigureChoices::default()
        };
        let (fig, _) = build_figure(&fan(), &c).unwrap();
        let p = &fig.panels[0];
        assert_eq!(p.x_axis.label, "ν");
        // Default field range: the top three quarters, 2.25…9 T.
        assert!((p.y_axis.range.0 - 2.25).abs() < 1e-9 && (p.y_axis.range.1 - 9.0).abs() < 1e-9);
        // The dip at ν = 2 sits at x = 2 in every row: the minimum over ν ∈ [1, 3] is there.
        let hm = p.heatmap.as_ref().unwrap();
        let row = hm.values.nrows() - 1;
        let (mut best, mut at) = (f64::INFINITY, 0.0);
        for (j, &x) in hm.x.iter().enumerate() {
            let v = hm.values[[row, j]];
            if (1.0..=3.0).contains(&x) && v < best {
                best = v;
                at = x;
            }
        }
        assert!((at - 2.0).abs() < 0.1, "minimum at ν = {at}");

        let w = FigureChoices {
            frame: Some(FrameKind::Wannier),
            gate: Some(gate()),
            ..FigureChoices::default()
        };
        assert!(build_figure(&fan(), &w)
            .unwrap_err()
            .to_string()
            .contains("n₀"));
        let w = FigureChoices {
            n0_m2: Some(N0),
            lines: vec![Line::gap(Family::Wannier, "test", r(-1, 1), r(1, 1))],
            ..w
        };
        let (fig, rep) = build_figure(&fan(), &w).unwrap();
        let p = &fig.panels[0];
        assert_eq!(
            (p.x_axis.label.as_str(), p.y_axis.label.as_str()),
            ("n/n_0", "φ/φ_0")
        );
        // y max = 9 T / (φ₀ n₀) = 9 / (4.135 667 696e-15 × 2.4e16) = 0.090 675.
        assert!(
            (p.y_axis.range.1 - 0.090_675).abs() < 1e-5,
            "{:?}",
            p.y_axis.range
        );
        assert_eq!(rep.lines_drawn, 1);
        // (t, s) = (−1, 1): x = 1 − y in the Wannier plane.
        for &(x, y) in &p.lines[0].points {
            assert!((x - (1.0 - y)).abs() < 1e-9);
        }
        assert!(p.right_axis.is_some());
    }

    #[test]
    fn bad_choices_are_named_errors() {
        let m = fan();
        let e = build_figure(
            &m,
            &FigureChoices {
                channel: "nope".into(),
                ..FigureChoices::default()
            },
        )
        .unwrap_err();
        assert!(e.to_string().contains("nope") && e.to_string().contains("drxx_dn"));
        let e = build_figure(
            &m,
            &FigureChoices {
                clip_percent: Some((50.0, 10.0)),
                ..FigureChoices::default()
            },
        )
        .unwrap_err();
        assert!(e.to_string().contains("percentiles"));
        let e = build_figure(
            &m,
            &FigureChoices {
                lines: vec![Line::gap(
                    Family::Integer,
                    "t",
                    Rational::integer(2),
                    Rational::ZERO,
                )],
                ..FigureChoices::default()
            },
        )
        .unwrap_err();
        assert!(e.to_string().contains("calibration"));
        assert!("nonsense".parse::<FrameKind>().is_err());
        assert_eq!("symlog".parse::<ScaleKind>().unwrap(), ScaleKind::SymLog);
        // σ from R needs the geometry.
        let e = build_figure(
            &m,
            &FigureChoices {
                channel: "sxy".into(),
                ..FigureChoices::default()
            },
        )
        .unwrap_err();
        assert!(e.to_string().contains("geometry"), "{e}");
    }
}

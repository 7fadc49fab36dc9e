//! Figures of the quantitative analyses, built as scenes for the shared backends:
//!
//! * Shubnikov–de Haas ([`sdh_figure`]): (a) the background-subtracted oscillation ΔR_xx against
//!   1/B (T⁻¹) with the minima used for indexing, (b) the amplitude spectrum against frequency
//!   B_F (T) with the fundamental and its harmonics, (c) the Landau index N against 1/B_N with the
//!   fitted line, its intercept N₀ and the Berry phase.
//! * Activation gap ([`activation_figure`]): ln(R_xx/Ω) against 1/T (K⁻¹), fitted points filled
//!   and the others hollow, the fit over the fitted range and Δ in K and meV; optionally the gap
//!   Δ (K, meV on the right) against B (T).
//! * Dual gate ([`dual_gate_figure`]): the (n, D/ε₀) map (n in 10¹² cm⁻², D/ε₀ in V/nm) with the
//!   constant-ν lines at the map's field and a colour bar.
//!
//! Sizes: width from [`FigureSize`] (86 mm is one journal column), heights follow from the
//! number of panels. Text in pt as everywhere in the scene.

use super::build::DENSITY_UNIT_M2;
use super::scene::{
    AxisSpec, ColorBar, ColorScale, Corner, Figure, HeatMap, Legend, LegendEntry, LineStyle,
    MarkerShape, MarkerStyle, Markers, Panel, Polyline, Resample, SecondaryAxis, Swatch, TextLabel,
    ValueRange,
};
use super::style::{line_style, Role};
use super::ticks::minus_sign;
use fanmark_core::constants::{BOLTZMANN_K, ELEMENTARY_CHARGE, E_OVER_H};
use fanmark_core::dualgate::FillingLine;
use fanmark_core::gaps::{Activation, ArrheniusPoint, GapVersusField};
use fanmark_core::line::Family;
use fanmark_core::map::{Map, Quantity};
use fanmark_core::palette::{by_name, companions};
use fanmark_core::sdh::SdhResult;
use fanmark_core::units::m2_to_cm2;
use fanmark_core::{Error, Result};
use std::sync::Arc;

/// Width and raster resolution of an analysis figure; the height follows from the content.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FigureSize {
    /// Width, mm (86 mm: one journal column).
    pub width_mm: f64,
    /// Raster resolution, dots per inch.
    pub dpi: f64,
}

impl Default for FigureSize {
    fn default() -> FigureSize {
        FigureSize {
            width_mm: 86.0,
            dpi: 300.0,
        }
    }
}

const BLACK: [u8; 3] = [0, 0, 0];
const WHITE: [u8; 3] = [255, 255, 255];
const GREY: [u8; 3] = [140, 140, 140];
/// Colour of missing map points (outside the measured gate parallelogram).
const MISSING: [u8; 3] = [236, 236, 236];
/// Height of one plot panel per mm of width.
const PANEL_ASPECT: f64 = 0.62;
/// Font size of in-panel labels, pt.
const LABEL_PT: f64 = 6.0;

/// A companion overlay colour by name (see `fanmark palettes`); black if missing.
fn companion(name: &str) -> [u8; 3] {
    companions()
        .iter()
        .find(|c| c.name == name)
        .map(|c| c.fill)
        .unwrap_or(BLACK)
}

/// The accent colours of the analysis figures: data markers and fitted lines.
fn accent() -> ([u8; 3], [u8; 3]) {
    (companion("dark-blue"), companion("dark-orange"))
}

fn marker(shape: MarkerShape, size_pt: f64, fill: [u8; 3], edge: [u8; 3]) -> MarkerStyle {
    MarkerStyle {
        shape,
        size_pt,
        fill,
        edge,
    }
}

/// Finite minimum and maximum of `values`, if any.
fn finite_range(values: impl IntoIterator<Item = f64>) -> Option<(f64, f64)> {
    values
        .into_iter()
        .filter(|v| v.is_finite())
        .fold(None, |acc, v| match acc {
            None => Some((v, v)),
            Some((lo, hi)) => Some((lo.min(v), hi.max(v))),
        })
}

/// `(lo, hi)` widened by `below` and `above` (fractions of the span); a zero span is widened to
/// ±10 % of the value (±1 at zero) so the axis is always valid.
fn padded((lo, hi): (f64, f64), below: f64, above: f64) -> (f64, f64) {
    let span = hi - lo;
    if span > 0.0 {
        (lo - below * span, hi + above * span)
    } else {
        let d = if lo == 0.0 { 1.0 } else { 0.1 * lo.abs() };
        (lo - d, hi + d)
    }
}

/// `value ± error` with the error to two significant digits and the value to the same
/// decimals, minus signs U+2212. A missing or zero error gives the value to three significant
/// digits and no ±.
pub fn value_with_error(value: f64, error: f64) -> String {
    if error.is_finite() && error > 0.0 {
        let decimals = (1 - error.log10().floor() as i32).clamp(0, 6) as usize;
        minus_sign(&format!("{value:.decimals$} ± {error:.decimals$}"))
    } else {
        let mag = if value == 0.0 {
            0
        } else {
            value.abs().log10().floor() as i32
        };
        let decimals = (2 - mag).clamp(0, 6) as usize;
        minus_sign(&format!("{value:.decimals$}"))
    }
}

/// Anchors along the top edge of a panel, left to right from `from` (fraction of the width):
/// a label placed there sits just below the frame.
fn top_anchors(x: (f64, f64), y: (f64, f64), from: f64) -> Vec<(f64, f64)> {
    [0.0, 0.12, 0.25, 0.4, 0.55, 0.7]
        .iter()
        .map(|f| (x.0 + (from + f) * (x.1 - x.0), y.1))
        .filter(|a| a.0 <= x.1)
        .collect()
}

/// Anchors in the corner `corner` of the axis ranges, stepping inward along the edge.
fn corner_anchors(x: (f64, f64), y: (f64, f64), corner: Corner) -> Vec<(f64, f64)> {
    let (right, top) = match corner {
        Corner::TopLeft => (false, true),
        Corner::TopRight => (true, true),
        Corner::BottomLeft => (false, false),
        Corner::BottomRight => (true, false),
    };
    let yv = if top { y.1 } else { y.0 };
    [0.0, 0.12, 0.25, 0.4]
        .iter()
        .map(|f| {
            let fx = if right { 1.0 - f } else { *f };
            (x.0 + fx * (x.1 - x.0), yv)
        })
        .collect()
}

/// A text label of the analysis figures: black on white.
fn info_label(text: String, anchors: Vec<(f64, f64)>) -> TextLabel {
    TextLabel {
        text,
        anchors,
        color: BLACK,
        size_pt: LABEL_PT,
        background: Some(WHITE),
    }
}

/// The panel tag "(a)", "(b)"… in the top-left corner; pushed first so it is always placed.
fn tag(panel: &mut Panel, letter: char) {
    let (x, y) = (panel.x_axis.range, panel.y_axis.range);
    panel.labels.insert(
        0,
        TextLabel {
            text: format!("({letter})"),
            anchors: vec![(x.0, y.1)],
            color: BLACK,
            size_pt: 7.0,
            background: None,
        },
    );
}

fn figure(size: FigureSize, height_mm: f64, title: &str, panels: Vec<Panel>) -> Figure {
    let mut fig = Figure::new(size.width_mm, height_mm);
    fig.dpi = size.dpi;
    fig.title = title.to_string();
    fig.font_pt = if size.width_mm < 120.0 { 7.0 } else { 8.0 };
    fig.panels = panels;
    fig
}

/// Height of a figure with `rows` panel rows and an optional title, mm.
fn height_for(size: FigureSize, rows: usize, title: &str) -> f64 {
    let title_mm = if title.is_empty() { 0.0 } else { 4.5 };
    size.width_mm * PANEL_ASPECT * rows as f64 + title_mm
}

/// Linear interpolation of `ys` (sampled at increasing `xs`) at `x`; NaN outside.
fn interpolate(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    if xs.len() < 2 || !(x >= xs[0] && x <= xs[xs.len() - 1]) {
        return f64::NAN;
    }
    let k = xs.partition_point(|&v| v <= x).clamp(1, xs.len() - 1);
    let (x0, x1) = (xs[k - 1], xs[k]);
    let u = if x1 > x0 { (x - x0) / (x1 - x0) } else { 0.0 };
    ys[k - 1] + u * (ys[k] - ys[k - 1])
}

/// Ω values shown in kΩ when they reach 1 kΩ: (factor to apply, unit text).
fn ohm_unit(largest: f64) -> (f64, &'static str) {
    if largest >= 1e3 {
        (1e-3, "kΩ")
    } else {
        (1.0, "Ω")
    }
}

/// The three-panel Shubnikov–de Haas figure of `res` (module docs).
pub fn sdh_figure(res: &SdhResult, title: &str, size: FigureSize) -> Result<Figure> {
    let tr = &res.trace;
    if tr.inv_b.len() < 2 || res.spectrum.frequency_t.len() < 2 {
        return Err(Error::invalid(
            "SdH figure",
            "the result holds no trace or spectrum to draw",
        ));
    }
    let (mark, fitc) = accent();

    // (a) Oscillation against 1/B.
    let largest = finite_range(tr.oscillation_ohm.iter().map(|v| v.abs()))
        .map(|r| r.1)
        .unwrap_or(0.0);
    let (k, unit) = ohm_unit(largest);
    let x_a = (tr.inv_b[0], tr.inv_b[tr.inv_b.len() - 1]);
    let y_data = finite_range(tr.oscillation_ohm.iter().map(|v| v * k)).unwrap_or((-1.0, 1.0));
    let y_a = padded(y_data, 0.08, 0.3);
    let mut a = Panel::new(
        AxisSpec {
            label: "1/B (T^{−1})".into(),
            range: x_a,
        },
        AxisSpec {
            label: format!("ΔR_{{xx}} ({unit})"),
            range: y_a,
        },
    );
    a.lines.push(Polyline {
        points: tr
            .inv_b
            .iter()
            .zip(&tr.oscillation_ohm)
            .map(|(&x, &y)| (x, y * k))
            .collect(),
        style: LineStyle::solid(BLACK, 0.6),
    });
    if let Some(ix) = &res.index {
        a.markers.push(Markers {
            points: ix
                .points
                .iter()
                .map(|p| {
                    (
                        p.inv_b,
                        k * interpolate(&tr.inv_b, &tr.oscillation_ohm, p.inv_b),
                    )
                })
                .collect(),
            style: marker(MarkerShape::Circle, 3.2, mark, BLACK),
        });
        a.labels.push(info_label(
            format!("{} R_{{xx}} minima", ix.points.len()),
            top_anchors(x_a, y_a, 0.55),
        ));
    }
    tag(&mut a, 'a');

    // (b) Spectrum against frequency.
    let highest_peak = res.peaks.iter().map(|p| p.frequency_t).fold(0.0, f64::max);
    let f_top = *res.spectrum.frequency_t.last().unwrap_or(&1.0);
    let x_max = (4.5 * res.frequency_t).max(1.15 * highest_peak).min(f_top);
    let spec: Vec<(f64, f64)> = res
        .spectrum
        .frequency_t
        .iter()
        .zip(&res.spectrum.amplitude_ohm)
        .filter(|(f, _)| **f <= x_max)
        .map(|(&f, &v)| (f, v))
        .collect();
    let amp_max = finite_range(spec.iter().map(|p| p.1))
        .map(|r| r.1)
        .unwrap_or(1.0);
    let (kb, unit_b) = ohm_unit(amp_max);
    let y_b = (
        0.0,
        if amp_max > 0.0 {
            1.3 * amp_max * kb
        } else {
            1.0
        },
    );
    let x_b = (0.0, if x_max > 0.0 { x_max } else { 1.0 });
    let mut b = Panel::new(
        AxisSpec {
            label: "B_F (T)".into(),
            range: x_b,
        },
        AxisSpec {
            label: format!("amplitude ({unit_b})"),
            range: y_b,
        },
    );
    b.lines.push(Polyline {
        points: spec.iter().map(|&(f, v)| (f, v * kb)).collect(),
        style: LineStyle::solid(BLACK, 0.6),
    });
    let lift = 0.07 * (y_b.1 - y_b.0);
    let mut related = Vec::new();
    let mut unrelated = Vec::new();
    let mut peak_labels = Vec::new();
    for p in res.peaks.iter().filter(|p| p.frequency_t <= x_max) {
        let at = (p.frequency_t, p.amplitude_ohm * kb);
        match p.harmonic {
            0 => unrelated.push(at),
            h => {
                related.push(at);
                // Of several peaks counted as the same harmonic, the one nearest h·B_F is
                // named for it; the others by their frequency.
                let nearest = res
                    .peaks
                    .iter()
                    .filter(|q| q.harmonic == h)
                    .map(|q| (q.frequency_t - f64::from(h) * res.frequency_t).abs())
                    .fold(f64::INFINITY, f64::min);
                let is_nearest = (p.frequency_t - f64::from(h) * res.frequency_t).abs() <= nearest;
                let text = if h == 1 && is_nearest {
                    format!("B_F = {} T", value_with_error(p.frequency_t, 0.0))
                } else if is_nearest {
                    format!("{h}B_F")
                } else {
                    format!("{} T", value_with_error(p.frequency_t, 0.0))
                };
                peak_labels.push((h, info_label(text, vec![(at.0, at.1 + lift), at])));
            }
        }
    }
    peak_labels.sort_by_key(|(h, _)| *h);
    b.markers.push(Markers {
        points: related,
        style: marker(MarkerShape::Triangle, 4.0, mark, BLACK),
    });
    if !unrelated.is_empty() {
        b.markers.push(Markers {
            points: unrelated,
            style: marker(MarkerShape::Cross, 3.5, GREY, GREY),
        });
    }
    b.labels.extend(peak_labels.into_iter().map(|(_, mut l)| {
        l.background = None;
        l
    }));
    let n_cm2 = m2_to_cm2(res.density_m2) / 1e12;
    b.labels.push(info_label(
        format!(
            "n = g·e·B_F/h = {}×10^{{12}} cm^{{−2}} (g = {})",
            value_with_error(n_cm2, 0.0),
            res.options.degeneracy
        ),
        corner_anchors(x_b, y_b, Corner::TopRight),
    ));
    tag(&mut b, 'b');

    let mut panels = vec![a, b];

    // (c) Landau index against 1/B_N.
    if let Some(ix) = &res.index {
        let inv_max = ix.points.iter().map(|p| p.inv_b).fold(0.0, f64::max);
        let x_c = (0.0, 1.08 * inv_max.max(f64::MIN_POSITIVE));
        let n_range = finite_range(ix.points.iter().map(|p| p.index as f64).chain([
            ix.intercept,
            ix.fit.eval(x_c.1),
            ix.at_spectrum_slope.intercept,
        ]))
        .unwrap_or((0.0, 1.0));
        let y_c = padded(n_range, 0.08, 0.35);
        let mut c = Panel::new(
            AxisSpec {
                label: "1/B_N (T^{−1})".into(),
                range: x_c,
            },
            AxisSpec {
                label: "Landau index N".into(),
                range: y_c,
            },
        );
        c.lines.push(Polyline {
            points: vec![(0.0, ix.fit.eval(0.0)), (x_c.1, ix.fit.eval(x_c.1))],
            style: LineStyle::solid(fitc, 0.8),
        });
        let held = &ix.at_spectrum_slope;
        let held_style = LineStyle {
            color: GREY,
            width_pt: 0.7,
            dash_pt: vec![3.0, 1.5],
            outline: None,
        };
        c.lines.push(Polyline {
            points: vec![
                (0.0, held.intercept),
                (x_c.1, held.intercept + held.slope_t * x_c.1),
            ],
            style: held_style.clone(),
        });
        c.lines.push(Polyline {
            points: vec![(x_c.0, 0.0), (x_c.1, 0.0)],
            style: LineStyle {
                color: GREY,
                width_pt: 0.4,
                dash_pt: vec![2.0, 1.5],
                outline: None,
            },
        });
        c.markers.push(Markers {
            points: ix
                .points
                .iter()
                .map(|p| (p.inv_b, p.index as f64))
                .collect(),
            style: marker(MarkerShape::Circle, 3.2, mark, BLACK),
        });
        c.labels.push(info_label(
            format!(
                "fit: N_0 = {}, φ_B = ({})π",
                value_with_error(ix.intercept, ix.intercept_err),
                value_with_error(ix.berry_phase_over_pi, ix.berry_phase_err_over_pi)
            ),
            top_anchors(x_c, y_c, 0.12),
        ));
        let below = |a: Vec<(f64, f64)>| -> Vec<(f64, f64)> {
            a.into_iter()
                .map(|(x, y)| (x, y - 0.13 * (y_c.1 - y_c.0)))
                .collect()
        };
        c.labels.push(info_label(
            format!(
                "held: N_0 = {}, φ_B = ({})π",
                value_with_error(held.intercept, held.intercept_err),
                value_with_error(held.berry_phase_over_pi, held.berry_phase_err_over_pi)
            ),
            below(top_anchors(x_c, y_c, 0.12)),
        ));
        c.legend = Some(Legend {
            entries: vec![
                LegendEntry {
                    swatch: Swatch::Marker(marker(MarkerShape::Circle, 3.2, mark, BLACK)),
                    text: "minima".into(),
                },
                LegendEntry {
                    swatch: Swatch::Line(LineStyle::solid(fitc, 0.8)),
                    text: format!(
                        "fit, B_F = {} T",
                        value_with_error(ix.fit.slope, ix.fit.slope_err)
                    ),
                },
                LegendEntry {
                    swatch: Swatch::Line(held_style),
                    text: format!("slope held at B_F = {:.2} T", held.slope_t),
                },
            ],
            corner: Corner::BottomRight,
        });
        tag(&mut c, 'c');
        panels.push(c);
    }
    let rows = panels.len();
    Ok(figure(size, height_for(size, rows, title), title, panels))
}

/// The Arrhenius panel of one activation fit.
fn arrhenius_panel(a: &Activation) -> Result<Panel> {
    let f = &a.arrhenius;
    let x_data = finite_range(f.points.iter().map(|p| p.inv_t))
        .ok_or_else(|| Error::invalid("activation figure", "no finite 1/T to draw"))?;
    let y_data = finite_range(f.points.iter().map(|p| p.ln_rxx))
        .ok_or_else(|| Error::invalid("activation figure", "no finite ln R_xx to draw"))?;
    let x = padded(x_data, 0.06, 0.06);
    let y = padded(y_data, 0.1, 0.3);
    let (mark, fitc) = accent();
    let mut p = Panel::new(
        AxisSpec {
            label: "1/T (K^{−1})".into(),
            range: x,
        },
        AxisSpec {
            label: "ln(R_{xx}/Ω)".into(),
            range: y,
        },
    );
    // The fitted range in 1/T: from 1/T_max to 1/T_min.
    let (t_lo, t_hi) = f.fit_range_k;
    let fit_line = LineStyle::solid(fitc, 0.8);
    p.lines.push(Polyline {
        points: [1.0 / t_hi, 1.0 / t_lo]
            .iter()
            .map(|&u| (u, f.fit.eval(u)))
            .collect(),
        style: fit_line.clone(),
    });
    let used = marker(MarkerShape::Circle, 3.4, mark, BLACK);
    let unused = marker(MarkerShape::Circle, 3.4, WHITE, GREY);
    let (on, off): (Vec<&ArrheniusPoint>, Vec<&ArrheniusPoint>) =
        f.points.iter().partition(|q| q.used);
    p.markers.push(Markers {
        points: on.iter().map(|q| (q.inv_t, q.ln_rxx)).collect(),
        style: used.clone(),
    });
    if !off.is_empty() {
        p.markers.push(Markers {
            points: off.iter().map(|q| (q.inv_t, q.ln_rxx)).collect(),
            style: unused.clone(),
        });
    }
    let mut entries = vec![LegendEntry {
        swatch: Swatch::Marker(used),
        text: "fitted".into(),
    }];
    if !off.is_empty() {
        entries.push(LegendEntry {
            swatch: Swatch::Marker(unused),
            text: "not fitted".into(),
        });
    }
    entries.push(LegendEntry {
        swatch: Swatch::Line(fit_line),
        text: "R_0 e^{−Δ/2k_BT}".into(),
    });
    // An activated series falls from top left to bottom right (slope −Δ/2k_B < 0): the
    // legend takes the bottom-left corner and the gap the top right, which the headroom keeps
    // free; a rising series gets the mirror image.
    let (legend_corner, label_corner) = if f.fit.slope <= 0.0 {
        (Corner::BottomLeft, Corner::TopRight)
    } else {
        (Corner::BottomRight, Corner::TopLeft)
    };
    p.legend = Some(Legend {
        entries,
        corner: legend_corner,
    });
    let mut anchors = corner_anchors(x, y, label_corner);
    if label_corner == Corner::TopLeft {
        // Leave the panel tag its corner.
        anchors.retain(|a| a.0 > x.0);
    }
    p.labels.push(info_label(
        format!(
            "Δ = {} K = {} meV",
            value_with_error(f.gap_k, f.gap_err_k),
            value_with_error(f.gap_mev, f.gap_err_mev),
        ),
        anchors,
    ));
    Ok(p)
}

/// Gap Δ (K) per meV: meV → K is e·10⁻³/k_B.
const K_PER_MEV: f64 = ELEMENTARY_CHARGE * 1e-3 / BOLTZMANN_K;

/// The gap-versus-field panel: Δ with its standard error against B.
fn gap_field_panel(g: &GapVersusField) -> Result<Panel> {
    if g.gaps.is_empty() {
        return Err(Error::invalid(
            "activation figure",
            "no field of the range gave a gap to draw",
        ));
    }
    let b = finite_range(g.gaps.iter().map(|q| q.0)).unwrap_or((0.0, 1.0));
    let d = finite_range(
        g.gaps
            .iter()
            .flat_map(|q| [q.1 - q.2.max(0.0), q.1 + q.2.max(0.0)]),
    )
    .unwrap_or((0.0, 1.0));
    let x = padded(b, 0.08, 0.08);
    let y = padded((d.0.min(0.0), d.1), 0.05, 0.25);
    let (mark, _) = accent();
    let mut p = Panel::new(
        AxisSpec {
            label: "B (T)".into(),
            range: x,
        },
        AxisSpec {
            label: "Δ (K)".into(),
            range: y,
        },
    );
    p.right_axis = Some(SecondaryAxis {
        label: "Δ (meV)".into(),
        map: Arc::new(|k: f64| k / K_PER_MEV),
    });
    for &(bt, dk, ek) in &g.gaps {
        if ek > 0.0 && ek.is_finite() {
            p.lines.push(Polyline {
                points: vec![(bt, dk - ek), (bt, dk + ek)],
                style: LineStyle::solid(BLACK, 0.5),
            });
        }
    }
    p.markers.push(Markers {
        points: g.gaps.iter().map(|q| (q.0, q.1)).collect(),
        style: marker(MarkerShape::Square, 3.2, mark, BLACK),
    });
    let mut text = format!("{} fields fitted", g.gaps.len());
    if !g.refused.is_empty() {
        text.push_str(&format!(", {} refused", g.refused.len()));
    }
    p.labels.push(info_label(text, top_anchors(x, y, 0.12)));
    Ok(p)
}

/// The activation-gap figure: the Arrhenius plot of `a`, and below it the gap against field
/// when `versus` is given.
pub fn activation_figure(
    a: &Activation,
    versus: Option<&GapVersusField>,
    title: &str,
    size: FigureSize,
) -> Result<Figure> {
    let mut panels = vec![arrhenius_panel(a)?];
    if let Some(g) = versus {
        panels.push(gap_field_panel(g)?);
        for (p, letter) in panels.iter_mut().zip(['a', 'b']) {
            tag(p, letter);
        }
    }
    let rows = panels.len();
    Ok(figure(size, height_for(size, rows, title), title, panels))
}

/// Most constant-ν lines drawn in one (n, D) figure; denser sets are thinned to every 2nd,
/// 4th, 8th… filling.
pub const MAX_FILLING_LINES: usize = 12;

/// Whether ν is a whole multiple of `step`.
fn on_step(nu: fanmark_core::Rational, step: i64) -> bool {
    nu.denom() == 1 && nu.numer() % step == 0
}

/// The smallest step in 1, 2, 4, 8… for which at most `max` of `lines` have ν on the step.
fn filling_step(lines: &[&FillingLine], max: usize) -> i64 {
    let mut step = 1i64;
    while step < 1 << 20 && lines.iter().filter(|l| on_step(l.nu, step)).count() > max {
        step *= 2;
    }
    step
}

/// The ν label of a constant-filling line.
fn nu_text(line: &FillingLine) -> String {
    fanmark_core::line::signed_text(line.nu)
}

/// The (n, D/ε₀) figure of `nd` (density m⁻² along x, D/ε₀ in V/m along y): `channel` as a
/// heat map on a log scale, the constant-ν `lines` at `field_t` (T) drawn and labelled (thinned
/// to [`MAX_FILLING_LINES`]), and a top ν axis at that field.
pub fn dual_gate_figure(
    nd: &Map,
    channel: &str,
    field_t: Option<f64>,
    lines: &[FillingLine],
    title: &str,
    size: FigureSize,
) -> Result<Figure> {
    if nd.x().quantity != Quantity::Density || nd.y().quantity != Quantity::Displacement {
        return Err(Error::MapRequirement(format!(
            "the (n, D) figure needs density along x and D/ε₀ along y; the map has {:?} and {:?}",
            nd.x().quantity,
            nd.y().quantity
        )));
    }
    let ch = nd.require_named(channel)?;
    let largest = finite_range(ch.data.iter().map(|v| v.abs()))
        .map(|r| r.1)
        .ok_or_else(|| Error::invalid("channel", format!("`{channel}` has no finite value")))?;
    let (k, unit) = ohm_unit(largest);
    let x: Vec<f64> = nd
        .x()
        .values()
        .iter()
        .map(|v| v / DENSITY_UNIT_M2)
        .collect();
    let y: Vec<f64> = nd.y().values().iter().map(|v| v * 1e-9).collect();
    let x_range = (x[0], x[x.len() - 1]);
    let y_range = (y[0], y[y.len() - 1]);
    let palette = by_name("kiln")?;
    // A log scale shows both the insulating peaks and the metallic background; noise that takes
    // a resistance to or below zero is drawn at the low end instead of as missing.
    let mut positive: Vec<f64> = ch
        .data
        .iter()
        .map(|v| v * k)
        .filter(|v| v.is_finite() && *v > 0.0)
        .collect();
    let floor = if positive.is_empty() {
        None
    } else {
        let at = (positive.len() - 1) / 100;
        let (_, f, _) = positive.select_nth_unstable_by(at, f64::total_cmp);
        Some(*f)
    };
    let values = ch.data.mapv(|v| match floor {
        Some(f) if v.is_finite() && v * k <= 0.0 => f,
        _ => v * k,
    });
    let mut p = Panel::new(
        AxisSpec {
            label: "n (10^{12} cm^{−2})".into(),
            range: x_range,
        },
        AxisSpec {
            label: "D/ε_0 (V nm^{−1})".into(),
            range: y_range,
        },
    );
    p.heatmap = Some(HeatMap {
        values,
        x,
        y,
        colors: (0..256).map(|i| palette.sample(i as f64 / 255.0)).collect(),
        scale: if floor.is_some() {
            ColorScale::Log
        } else {
            ColorScale::Linear
        },
        range: ValueRange::Percentile(1.0, 99.0),
        resample: Resample::Bilinear,
        missing: Some(MISSING),
    });
    p.colorbar = Some(ColorBar {
        label: format!("R_{{xx}} ({unit})"),
        width_mm: 2.5,
    });
    let style = line_style(Family::Integer, Role::Predicted);
    let visible: Vec<&FillingLine> = lines
        .iter()
        .filter(|l| {
            let xn = l.density_m2 / DENSITY_UNIT_M2;
            xn > x_range.0 && xn < x_range.1
        })
        .collect();
    let step = filling_step(&visible, MAX_FILLING_LINES);
    let mut drawn = 0;
    for l in visible.into_iter().filter(|l| on_step(l.nu, step)) {
        let xn = l.density_m2 / DENSITY_UNIT_M2;
        drawn += 1;
        p.lines.push(Polyline {
            points: vec![(xn, y_range.0), (xn, y_range.1)],
            style: style.clone(),
        });
        let h = y_range.1 - y_range.0;
        p.labels.push(TextLabel {
            text: nu_text(l),
            anchors: [0.97, 0.9, 0.83, 0.76, 0.1, 0.03]
                .iter()
                .map(|f| (xn, y_range.0 + f * h))
                .collect(),
            color: BLACK,
            size_pt: 5.0,
            background: Some(style.color),
        });
    }
    if drawn > 0 {
        let text = match field_t {
            Some(b) => format!("constant ν at {b} T"),
            None => "constant ν".to_string(),
        };
        p.legend = Some(Legend {
            entries: vec![LegendEntry {
                swatch: Swatch::Line(style),
                text,
            }],
            corner: Corner::BottomRight,
        });
    }
    if let Some(b) = field_t.filter(|b| b.is_finite() && *b != 0.0) {
        let per = E_OVER_H * b / DENSITY_UNIT_M2;
        p.top_axis = Some(SecondaryAxis {
            label: "ν".into(),
            map: Arc::new(move |n: f64| n / per),
        });
    }
    let h = size.width_mm * 0.78 + if title.is_empty() { 0.0 } else { 4.5 };
    Ok(figure(size, h, title, vec![p]))
}

#[cfg(test)]
mod tests {
    use super::*;
    use fanmark_core::gaps::{fit_arrhenius, ActivatedRange, GapOptions, StateLine};
    use fanmark_core::gate::{Dielectric, DualGate};
    use fanmark_core::map::{Axis, Channel, ChannelKind};
    use fanmark_core::sdh::{analyse_trace, SdhOptions, Trace};
    use fanmark_core::Rational;
    use ndarray::Array2;

    /// Minima where B_F/B = N − N₀ on a smooth background: R = 500 + 40/B − 300 e^{−3/B}
    /// cos(2π(B_F/B + N₀)).
    fn trace(b_f: f64, n0: f64) -> Trace {
        let b: Vec<f64> = (0..3000).map(|i| 1.0 + 8.0 * i as f64 / 2999.0).collect();
        let r = b
            .iter()
            .map(|&x| {
                500.0 + 40.0 / x
                    - 300.0 * (-3.0 / x).exp() * (2.0 * std::f64::consts::PI * (b_f / x + n0)).cos()
            })
            .collect();
        Trace { b_t: b, rxx_ohm: r }
    }

    #[test]
    fn sdh_figure_shows_trace_minima_spectrum_and_index_fit() {
        let res = analyse_trace(&trace(20.0, -0.5), &SdhOptions::for_window(1.5, 9.0)).unwrap();
        let ix = res.index.as_ref().expect("index fit");
        let fig = sdh_figure(&res, "test", FigureSize::default()).unwrap();
        assert_eq!(fig.panels.len(), 3);
        let (a, b, c) = (&fig.panels[0], &fig.panels[1], &fig.panels[2]);
        // (a) one marker per minimum used, sitting on the oscillation (below zero).
        assert_eq!(a.markers[0].points.len(), ix.points.len());
        assert!(a.markers[0].points.iter().all(|p| p.1 < 0.0));
        assert_eq!(a.x_axis.label, "1/B (T^{−1})");
        // (b) the fundamental is marked and named with its frequency.
        let f_label = b
            .labels
            .iter()
            .find(|l| l.text.starts_with("B_F = "))
            .expect("fundamental labelled");
        assert!(f_label
            .text
            .contains(&value_with_error(res.frequency_t, 0.0)));
        assert!(b.markers[0]
            .points
            .iter()
            .any(|p| (p.0 - res.frequency_t).abs() < 1e-12));
        // (c) as many markers as fitted minima, at (1/B_N, N); the line meets x = 0 at N₀.
        assert_eq!(c.markers[0].points.len(), ix.points.len());
        for (m, p) in c.markers[0].points.iter().zip(&ix.points) {
            assert_eq!(*m, (p.inv_b, p.index as f64));
        }
        let fit = &c.lines[0].points;
        assert_eq!(fit[0].0, 0.0);
        assert!((fit[0].1 - ix.intercept).abs() < 1e-12);
        // The synthetic N₀ = −½ (Berry phase π) shows in the label.
        assert!((ix.intercept + 0.5).abs() < 0.05, "{}", ix.intercept);
        assert!(c.labels.iter().any(|l| l.text.contains("φ_B = (")));
        // Tags (a), (b), (c) lead each panel's labels.
        for (p, t) in fig.panels.iter().zip(["(a)", "(b)", "(c)"]) {
            assert_eq!(p.labels[0].text, t);
        }
        let png = crate::figure::encode(&fig, crate::figure::Format::Png).unwrap();
        assert_eq!(&png[1..4], b"PNG");
    }

    /// check-values §11 (V): Δ/k_B = 10 K, R₀ = 1000 Ω, R = R₀ exp(−Δ/(2k_BT)), from the
    /// fixture file shared with the reference tests.
    fn fixture(opts: &GapOptions) -> Activation {
        let (t, r): (Vec<f64>, Vec<f64>) =
            include_str!("../../../tests/fixtures/arrhenius_10K.csv")
                .lines()
                .filter(|l| !l.starts_with('#') && !l.starts_with("T_K"))
                .map(|l| {
                    let (t, r) = l.split_once(',').expect("T,R");
                    (t.parse::<f64>().unwrap(), r.parse::<f64>().unwrap())
                })
                .unzip();
        Activation {
            state: StateLine::filling(Rational::integer(2)),
            b_t: 9.0,
            line_density_m2: 0.0,
            minimum_density_m2: vec![0.0; t.len()],
            arrhenius: fit_arrhenius(&t, &r, opts).unwrap(),
        }
    }

    #[test]
    fn arrhenius_line_has_slope_minus_gap_over_two_k_b() {
        let a = fixture(&GapOptions::default());
        let fig = activation_figure(&a, None, "", FigureSize::default()).unwrap();
        let p = &fig.panels[0];
        let line = &p.lines[0].points;
        let slope = (line[1].1 - line[0].1) / (line[1].0 - line[0].0);
        // Slope of ln R against 1/T = −Δ/(2k_B) with Δ in J from meV (exact SI 2019 k_B and e,
        // check-values §1), and −5 K for the 10 K fixture (check-values §11).
        let delta_j = a.arrhenius.gap_mev * 1e-3 * 1.602_176_634e-19;
        assert!(
            (slope + delta_j / (2.0 * 1.380_649e-23)).abs() < 1e-6,
            "{slope}"
        );
        assert!((slope + 5.0).abs() < 1e-6, "{slope}");
        // The line spans the fitted range exactly: 1/10 K⁻¹ … 1/2 K⁻¹.
        assert!((line[0].0 - 0.1).abs() < 1e-12 && (line[1].0 - 0.5).abs() < 1e-12);
        // All eight points fitted: one filled set, no hollow set.
        assert_eq!(p.markers.len(), 1);
        assert_eq!(p.markers[0].points.len(), 8);
        let label = p
            .labels
            .iter()
            .find(|l| l.text.starts_with("Δ = "))
            .unwrap();
        // 10 K = 0.861 733 meV (check-values §11).
        assert!(label.text.contains("K = 0.8617"), "{}", label.text);
    }

    #[test]
    fn points_outside_a_given_range_are_hollow() {
        let opts = GapOptions {
            range: ActivatedRange::Given {
                t_min_k: 2.5,
                t_max_k: 8.0,
            },
            ..GapOptions::default()
        };
        let a = fixture(&opts);
        let fig = activation_figure(&a, None, "", FigureSize::default()).unwrap();
        let p = &fig.panels[0];
        assert_eq!(p.markers.len(), 2);
        assert_eq!(p.markers[0].points.len(), 6);
        assert_eq!(p.markers[1].points.len(), 2);
        assert_eq!(p.markers[1].style.fill, WHITE);
        assert_ne!(p.markers[0].style.fill, WHITE);
        let x: Vec<f64> = p.lines[0].points.iter().map(|q| q.0).collect();
        assert!((x[0] - 1.0 / 8.0).abs() < 1e-12 && (x[1] - 1.0 / 2.5).abs() < 1e-12);
        let legend: Vec<&str> = p
            .legend
            .as_ref()
            .unwrap()
            .entries
            .iter()
            .map(|e| e.text.as_str())
            .collect();
        assert_eq!(legend[..2], ["fitted", "not fitted"]);
    }

    #[test]
    fn gap_versus_field_panel_has_bars_and_a_mev_axis() {
        let a = fixture(&GapOptions::default());
        let g = GapVersusField {
            state: a.state,
            gaps: vec![(6.0, 8.0, 0.5), (7.0, 9.0, 0.4), (8.0, 10.0, 0.3)],
            refused: vec![(9.0, "too few".into())],
            fits: vec![a.clone()],
        };
        let fig = activation_figure(&a, Some(&g), "t", FigureSize::default()).unwrap();
        assert_eq!(fig.panels.len(), 2);
        let p = &fig.panels[1];
        assert_eq!(p.markers[0].points, [(6.0, 8.0), (7.0, 9.0), (8.0, 10.0)]);
        // One error bar per gap, ± its error.
        assert_eq!(p.lines.len(), 3);
        assert_eq!(p.lines[1].points, [(7.0, 8.6), (7.0, 9.4)]);
        // 1 meV = 11.604 518 K (check-values §1).
        let mev = p.right_axis.as_ref().unwrap().map.clone();
        assert!((mev(11.604_518) - 1.0).abs() < 1e-6);
        assert!(p.labels.iter().any(|l| l.text.contains("1 refused")));
        // Nothing fitted: a clear error, not an empty panel.
        let none = GapVersusField {
            gaps: Vec::new(),
            ..g
        };
        let e = activation_figure(&a, Some(&none), "", FigureSize::default()).unwrap_err();
        assert!(e.to_string().contains("no field"), "{e}");
    }

    fn dual_gate() -> DualGate {
        let hbn = |nm: f64| Dielectric {
            thickness_m: nm * 1e-9,
            epsilon_r: 3.4,
        };
        DualGate::from_dielectrics(&hbn(25.0), &hbn(45.0)).unwrap()
    }

    /// An (n, D/ε₀) map with R_xx dips at ν = 4k for B = 6 T.
    fn nd_map(b: f64) -> Map {
        let x = Axis::uniform("n", Quantity::Density, -3e16, 3e14, 201).unwrap();
        let y = Axis::uniform("d", Quantity::Displacement, -3e8, 6e6, 101).unwrap();
        let xs = x.values().to_vec();
        let r = Array2::from_shape_fn((101, 201), |(_, j)| {
            let nu = xs[j] / (E_OVER_H * b);
            2000.0 - 1500.0 * (std::f64::consts::PI * nu / 4.0).cos().powi(8)
        });
        let mut m = Map::new(x, y);
        m.add_channel(Channel::new("rxx", ChannelKind::Rxx, r))
            .unwrap();
        m
    }

    #[test]
    fn dual_gate_figure_draws_thinned_filling_lines_at_their_density() {
        let b = 6.0;
        let map = nd_map(b);
        let nus: Vec<Rational> = (-40..=40).map(Rational::integer).collect();
        let lines =
            fanmark_core::dualgate::filling_lines(&dual_gate(), &nus, b, (-3e8, 3e8)).unwrap();
        let fig =
            dual_gate_figure(&map, "rxx", Some(b), &lines, "", FigureSize::default()).unwrap();
        let p = &fig.panels[0];
        assert_eq!(p.x_axis.label, "n (10^{12} cm^{−2})");
        assert_eq!(p.y_axis.label, "D/ε_0 (V nm^{−1})");
        // D/ε₀ shown in V/nm: ±3×10⁸ V/m = ±0.3 V/nm.
        assert!((p.y_axis.range.0 + 0.3).abs() < 1e-12 && (p.y_axis.range.1 - 0.3).abs() < 1e-12);
        // ±3×10¹² cm⁻² holds |ν| ≤ 20 at 6 T (n h/(eB) = 3e16/(2.418e14 × 6) = 20.7): 41
        // integer lines, thinned to every 4th (11 lines ≤ 12).
        assert_eq!(p.lines.len(), 11);
        for l in &p.lines {
            let nu = l.points[0].0 * DENSITY_UNIT_M2 / (E_OVER_H * b);
            assert!((nu / 4.0 - (nu / 4.0).round()).abs() < 1e-9, "ν = {nu}");
            assert_eq!(l.points[0].0, l.points[1].0);
        }
        assert_eq!(p.labels.len(), 11);
        assert!(p.labels.iter().any(|l| l.text == "−8"));
        // The top axis reads ν at the map's field.
        let top = p.top_axis.as_ref().unwrap().map.clone();
        assert!((top(8.0 * E_OVER_H * b / DENSITY_UNIT_M2) - 8.0).abs() < 1e-9);
        assert!(matches!(p.heatmap.as_ref().unwrap().scale, ColorScale::Log));
        assert!(p.colorbar.as_ref().unwrap().label.contains("kΩ"));
        // A map in the gate plane is refused with the axes named.
        let mut wrong = Map::new(
            Axis::uniform("vt", Quantity::TopGate, -1.0, 0.1, 3).unwrap(),
            Axis::uniform("vb", Quantity::BottomGate, -1.0, 0.1, 3).unwrap(),
        );
        wrong
            .add_channel(Channel::new("rxx", ChannelKind::Rxx, Array2::ones((3, 3))))
            .unwrap();
        let e = dual_gate_figure(&wrong, "rxx", None, &[], "", FigureSize::default()).unwrap_err();
        assert!(e.to_string().contains("TopGate"), "{e}");
        let e = dual_gate_figure(&map, "sxy", None, &[], "", FigureSize::default()).unwrap_err();
        assert!(e.to_string().contains("rxx"), "{e}");
    }

    #[test]
    fn values_carry_two_significant_digits_of_their_error() {
        assert_eq!(value_with_error(-0.5523, 0.0604), "−0.552 ± 0.060");
        assert_eq!(value_with_error(341.372, 1.546), "341.4 ± 1.5");
        assert_eq!(value_with_error(31.0554, 0.0), "31.1");
        assert_eq!(value_with_error(3.00367, f64::NAN), "3.00");
        assert_eq!(value_with_error(1234.0, 56.0), "1234 ± 56");
    }
}

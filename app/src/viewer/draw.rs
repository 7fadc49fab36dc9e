//! Drawing: the view state as a figure scene (heat map panel, overlays, labels, an optional
//! line-cut panel), rasterised through the figure backend, plus the status line and the key-map
//! overlay. [`figure_of`] is a pure function of the state; [`Renderer`] keeps the heat map, the
//! base layer and the overlay layer (see [`super::layers`]) so that a pointer move composites
//! cached layers and draws only the pointer's own items; [`render_direct`] draws the same frame
//! without caches, as the reference.

use super::data::ChannelChoice;
use super::heat::{heat_after_pan, heat_of};
use super::interim::{scale_region, shift_region, PixelMap};
use super::keys::help_lines;
use super::layers::{draw_overlay_item, OverlayLayer, PixelRect};
use super::state::{CutKind, FrameKind, Mode, PlotArea, ScaleKind, ViewState, Viewport};
use crate::figure::draw::Item;
use crate::figure::geom::Rect;
use crate::figure::heatmap::ColorMapping;
use crate::figure::layout::{data_items, is_plot_frame, label_items, layout};
use crate::figure::raster::{
    copy_pixmap, draw_item, draw_list_onto, filled_pixmap, heatmap_layer, pixel_rect,
};
use crate::figure::scene::{
    AxisSpec, ColorBar, Figure, HeatMap, LineStyle, MarkerShape, MarkerStyle, Markers, Panel,
    Polyline, TextLabel, ValueRange,
};
use crate::figure::text::glyph;
use fanmark_core::constants::E_OVER_H;
use fanmark_core::line::{Family, FrameRect, Line};
use fanmark_core::{Rational, Result};
use ndarray::Array2;
use std::rc::Rc;
use std::sync::Arc;
use tiny_skia::Pixmap;

/// Screen resolution at scale factor 1, dots per inch (the common desktop convention).
pub const SCREEN_DPI: f64 = 96.0;
/// Height of the status line, logical px.
pub const STATUS_PX: f64 = 22.0;

/// Display unit of a frame's x axis: (label, SI value × factor = shown value).
pub(super) fn x_axis_unit(k: FrameKind) -> (&'static str, f64) {
    match k {
        FrameKind::GateField => ("V_g (V)", 1.0),
        FrameKind::DensityField => ("n (10^{12} cm^{−2})", 1e-16),
        FrameKind::FillingField => ("ν", 1.0),
        FrameKind::Wannier => ("n/n_0", 1.0),
    }
}

fn y_axis_label(k: FrameKind) -> &'static str {
    match k {
        FrameKind::Wannier => "φ/φ_0",
        _ => "B (T)",
    }
}

/// Everything the heat-map layer depends on; equal keys give equal layers.
#[derive(Clone, Debug, PartialEq)]
pub struct LayerKey {
    frame: FrameKind,
    channel: ChannelChoice,
    palette: usize,
    scale: ScaleKind,
    clip_pct: f64,
    view: Viewport,
    size: (u32, u32),
}

impl LayerKey {
    /// True when `other` differs from this key in the viewport alone.
    fn differs_only_in_view(&self, other: &LayerKey) -> bool {
        let mut moved = other.clone();
        moved.view = self.view;
        moved == *self
    }
}

fn family_style(f: Family) -> LineStyle {
    let (color, dash) = match f {
        Family::Integer => ([255, 255, 255], vec![]),
        Family::BrokenSymmetry => ([200, 230, 255], vec![4.0, 2.0]),
        Family::CompositeFermion => ([255, 220, 120], vec![1.5, 1.5]),
        Family::Satellite => ([170, 255, 190], vec![4.0, 1.5, 1.0, 1.5]),
        Family::Wannier => ([255, 170, 230], vec![2.5, 1.5]),
        Family::BrownZak => ([220, 220, 220], vec![1.0, 2.0]),
    };
    LineStyle {
        color,
        width_pt: 0.6,
        dash_pt: dash,
        outline: None,
    }
}

fn ts_line(t: Rational, s: Rational) -> Line {
    Line::gap(Family::Wannier, "view", t, s)
}

/// The visible polylines of `line` in the state's frame and viewport.
fn clipped(s: &ViewState, line: &Line) -> Vec<Vec<(f64, f64)>> {
    let v = s.view;
    let Ok(rect) = FrameRect::new(v.x0, v.x1, v.y0, v.y1) else {
        return Vec::new();
    };
    s.core_frame()
        .clip(line, &rect)
        .unwrap_or_default()
        .into_iter()
        .map(|seg| seg.points.iter().map(|p| (p.x, p.y)).collect())
        .collect()
}

fn scaled(points: Vec<(f64, f64)>, fx: f64) -> Vec<(f64, f64)> {
    points.into_iter().map(|(x, y)| (x * fx, y)).collect()
}

/// The map panel: heat map (values from `heat`), axes, colour bar and every overlay.
fn map_panel(s: &ViewState, heat: Option<HeatMap>) -> Panel {
    let mut p = map_axes(s, heat);
    add_kept_overlay(s, &mut p);
    add_pointer_overlay(s, &mut p);
    p
}

/// The map panel's axes, heat map (values from `heat`) and colour bar, without overlays.
fn map_axes(s: &ViewState, heat: Option<HeatMap>) -> Panel {
    let (xl, fx) = x_axis_unit(s.frame);
    let v = s.view;
    let mut p = Panel::new(
        AxisSpec {
            label: xl.into(),
            range: (v.x0 * fx, v.x1 * fx),
        },
        AxisSpec {
            label: y_axis_label(s.frame).into(),
            range: (v.y0, v.y1),
        },
    );
    if let Some(h) = heat {
        p.heatmap = Some(h);
        p.colorbar = Some(ColorBar {
            label: s.channel.label().0.into(),
            width_mm: 3.0,
        });
    }
    p
}

/// The overlays that stay while the pointer moves: predicted lines, detected states, labels
/// with their lines and the collected picks, added to `p` (which has the map's axes).
fn add_kept_overlay(s: &ViewState, p: &mut Panel) {
    let fx = x_axis_unit(s.frame).1;
    for l in s.shown_lines() {
        for pts in clipped(s, l) {
            p.lines.push(Polyline {
                points: scaled(pts, fx),
                style: family_style(l.family),
            });
        }
    }
    if s.overlays.show_states {
        for st in s.data.states.iter().take(40) {
            let line = ts_line(st.t, st.s);
            let segs = clipped(s, &line);
            for pts in &segs {
                p.lines.push(Polyline {
                    points: scaled(pts.clone(), fx),
                    style: LineStyle {
                        color: [120, 255, 255],
                        width_pt: 0.9,
                        dash_pt: vec![],
                        outline: Some([0, 0, 0]),
                    },
                });
            }
            if let Some(seg) = segs.first() {
                p.labels.push(TextLabel {
                    text: super::state::ts_text(st.t, st.s),
                    anchors: anchors(seg, fx),
                    color: [0, 90, 110],
                    size_pt: 7.0,
                    background: Some([230, 255, 255]),
                });
            }
        }
    }
    for l in s.work.labels.iter().filter(|l| !l.hidden) {
        let sel = s.work.selected == Some(l.id);
        let segs = clipped(s, &ts_line(l.t, l.s));
        for pts in &segs {
            p.lines.push(Polyline {
                points: scaled(pts.clone(), fx),
                style: LineStyle {
                    color: if sel { [255, 80, 40] } else { [255, 200, 0] },
                    width_pt: if sel { 1.8 } else { 1.2 },
                    dash_pt: vec![],
                    outline: Some([0, 0, 0]),
                },
            });
        }
        if let Some(seg) = segs.first() {
            p.labels.push(TextLabel {
                text: l.shown_text(),
                anchors: anchors(seg, fx),
                color: [0, 0, 0],
                size_pt: 8.0,
                background: Some(if sel {
                    [255, 210, 190]
                } else {
                    [255, 240, 170]
                }),
            });
        }
    }
    let frame = s.core_frame();
    let picks: Vec<(f64, f64)> = s
        .work
        .picks
        .iter()
        .filter_map(|pk| {
            frame
                .to_frame(s.data.gate.density(pk.gate_v), pk.field_t)
                .ok()
                .map(|q| (q.x * fx, q.y))
        })
        .collect();
    if !picks.is_empty() {
        p.markers.push(Markers {
            points: picks,
            style: MarkerStyle {
                shape: MarkerShape::Circle,
                size_pt: 4.5,
                fill: [255, 60, 200],
                edge: [0, 0, 0],
            },
        });
    }
}

/// The overlays that follow the pointer and the chosen reading: the highlighted line under the
/// pointer, the chosen candidate's line and the snap marker, added to `p`.
fn add_pointer_overlay(s: &ViewState, p: &mut Panel) {
    let fx = x_axis_unit(s.frame).1;
    if s.overlays.highlight {
        if let Some(&(t, sv, _)) = s.lines_under_pointer(8.0 * s.dpi_scale).first() {
            for pts in clipped(s, &ts_line(t, sv)) {
                p.lines.push(Polyline {
                    points: scaled(pts, fx),
                    style: LineStyle {
                        color: [80, 255, 80],
                        width_pt: 1.4,
                        dash_pt: vec![3.0, 2.0],
                        outline: None,
                    },
                });
            }
        }
    }
    if let Some(r) = s.readings.get(s.chosen) {
        for pts in clipped(s, &ts_line(r.candidate.t, r.candidate.s)) {
            p.lines.push(Polyline {
                points: scaled(pts, fx),
                style: LineStyle {
                    color: [255, 120, 255],
                    width_pt: 1.0,
                    dash_pt: vec![2.0, 2.0],
                    outline: None,
                },
            });
        }
    }
    let frame = s.core_frame();
    if let Some((g, b, _)) = s.snapped() {
        if let Ok(q) = frame.to_frame(s.data.gate.density(g), b) {
            p.markers.push(Markers {
                points: vec![(q.x * fx, q.y)],
                style: MarkerStyle {
                    shape: MarkerShape::Cross,
                    size_pt: 7.0,
                    fill: [0, 255, 0],
                    edge: [0, 0, 0],
                },
            });
        }
    }
}

fn anchors(seg: &[(f64, f64)], fx: f64) -> Vec<(f64, f64)> {
    let (a, b) = (seg[0], seg[seg.len() - 1]);
    [0.85, 0.7, 0.55, 0.4, 0.25]
        .iter()
        .map(|t| ((a.0 + (b.0 - a.0) * t) * fx, a.1 + (b.1 - a.1) * t))
        .collect()
}

/// A line cut: (x label, y label, points (x, value)) in display units.
#[derive(Clone, Debug, PartialEq)]
pub struct Cut {
    /// What x is, with unit.
    pub x_label: String,
    /// What the value is, with unit.
    pub y_label: String,
    /// (x, value) in display units, NaN-free.
    pub points: Vec<(f64, f64)>,
}

/// The line cut the state asks for at the pointer (or the selected label for `Line`).
pub fn cut_of(s: &ViewState) -> Option<Cut> {
    let (vlabel, vf) = s.channel.label();
    let m = &s.data.map;
    let ch = s.data.channel(s.channel)?;
    let values = &ch.pyramid.levels[0].values;
    let pointer = s.pointer.and_then(|p| s.px_to_physical(p.0, p.1));
    match s.cut {
        CutKind::Off => None,
        CutKind::Row => {
            let (_, _, b) = pointer?;
            let r = m.y().nearest_index(b)?;
            let (xl, fx) = x_axis_unit(s.frame);
            let frame = s.core_frame();
            let points = m
                .x()
                .values()
                .iter()
                .enumerate()
                .filter_map(|(j, &g)| {
                    let v = values[[r, j]];
                    let q = frame
                        .to_frame(s.data.gate.density(g), m.y().values()[r])
                        .ok()?;
                    v.is_finite().then_some((q.x * fx, v * vf))
                })
                .collect();
            Some(Cut {
                x_label: xl.into(),
                y_label: format!("{vlabel} at B = {:.3} T", m.y().values()[r]),
                points,
            })
        }
        CutKind::Column => {
            let (g, _, _) = pointer?;
            let c = m.x().nearest_index(g)?;
            let points = m
                .y()
                .values()
                .iter()
                .enumerate()
                .filter_map(|(i, &b)| {
                    let v = values[[i, c]];
                    v.is_finite().then_some((b, v * vf))
                })
                .collect();
            Some(Cut {
                x_label: "B (T)".into(),
                y_label: format!("{vlabel} at V_g = {:.4} V", m.x().values()[c]),
                points,
            })
        }
        CutKind::Line => {
            let (t, sv) = match s.selected() {
                Some(l) => (l.t, l.s),
                None => {
                    let l = s.lines_under_pointer(8.0 * s.dpi_scale);
                    let f = l.first()?;
                    (f.0, f.1)
                }
            };
            let n0 = s.data.n0_m2.unwrap_or(0.0);
            let points = m
                .y()
                .values()
                .iter()
                .filter_map(|&b| {
                    let n = t.to_f64() * E_OVER_H * b + sv.to_f64() * n0;
                    let v = s
                        .data
                        .value_at(s.channel, s.data.gate.gate_for_density(n), b)?;
                    Some((b, v * vf))
                })
                .collect();
            Some(Cut {
                x_label: "B (T)".into(),
                y_label: format!("{vlabel} along {}", super::state::ts_text(t, sv)),
                points,
            })
        }
    }
}

/// The cut as CSV text: header with units, one row per point.
pub fn cut_csv(c: &Cut) -> String {
    let mut out = format!("# {}\n", c.y_label.replace('\n', " "));
    out.push_str("x,value\n");
    for (x, v) in &c.points {
        out.push_str(&format!("{x},{v}\n"));
    }
    out
}

fn cut_panel(c: &Cut) -> Option<Panel> {
    if c.points.len() < 2 {
        return None;
    }
    let (mut x0, mut x1, mut y0, mut y1) = (f64::MAX, f64::MIN, f64::MAX, f64::MIN);
    for &(x, y) in &c.points {
        x0 = x0.min(x);
        x1 = x1.max(x);
        y0 = y0.min(y);
        y1 = y1.max(y);
    }
    if !(x1 > x0) {
        return None;
    }
    if !(y1 > y0) {
        y0 -= 1.0;
        y1 += 1.0;
    }
    let pad = 0.05 * (y1 - y0);
    let mut p = Panel::new(
        AxisSpec {
            label: c.x_label.clone(),
            range: (x0, x1),
        },
        AxisSpec {
            label: c.y_label.clone(),
            range: (y0 - pad, y1 + pad),
        },
    );
    p.lines.push(Polyline {
        points: c.points.clone(),
        style: LineStyle::solid([20, 60, 160], 0.8),
    });
    Some(p)
}

/// The figure of the state for a window of `w`×`h` physical px (the status line excluded),
/// heat map sampled at `samples` (columns, rows). Pure.
pub fn figure_of(s: &ViewState, w: u32, h: u32, samples: (usize, usize)) -> Figure {
    let dpi = SCREEN_DPI * s.dpi_scale;
    let mm = |px: u32| px.max(50) as f64 / dpi * 25.4;
    let mut fig = Figure::new(mm(w), mm(h));
    fig.dpi = dpi;
    fig.font_pt = 9.0;
    let heat = heat_of(s, samples.0, samples.1);
    fig.panels.push(map_panel(s, Some(heat)));
    if let Some(p) = cut_of(s).as_ref().and_then(cut_panel) {
        fig.columns = 2;
        fig.panels.push(p);
    }
    fig
}

/// The figure at publication size (what the view shows, for export): 178 mm wide at 300 dpi.
pub fn export_figure(s: &ViewState) -> Figure {
    let mut fig = figure_of(s, 1, 1, (1200, 800));
    let aspect = s.window.1 as f64 / s.window.0.max(1) as f64;
    fig.width_mm = 178.0;
    fig.height_mm = (178.0 * aspect).clamp(60.0, 240.0);
    fig.dpi = 300.0;
    fig.font_pt = 7.0;
    fig
}

/// A 2 × 2 stand-in for `h` with its colours, scale, range and extent.
fn light_heat(h: &HeatMap) -> HeatMap {
    let ends = |v: &[f64]| vec![v[0], v[v.len() - 1]];
    let fill = match h.range {
        ValueRange::Fixed(lo, _) => lo,
        _ => 1.0,
    };
    HeatMap {
        values: Array2::from_elem((2, 2), fill),
        x: ends(&h.x),
        y: ends(&h.y),
        colors: h.colors.clone(),
        scale: h.scale,
        range: h.range,
        resample: h.resample,
        missing: h.missing,
    }
}

/// Where the map's plot sits in a rendered frame: its rectangle in page pt, the device scale
/// (px per pt), the same rectangle in window pixels and the axis ranges (display units).
#[derive(Clone, Copy, Debug, PartialEq)]
struct PlotGeometry {
    rect: Rect,
    scale: f64,
    pixels: PixelRect,
    x_range: (f64, f64),
    y_range: (f64, f64),
}

impl PlotGeometry {
    /// A panel with the plot's axis ranges and no content, to lay overlays out in.
    fn panel(&self) -> Panel {
        Panel::new(
            AxisSpec {
                label: String::new(),
                range: self.x_range,
            },
            AxisSpec {
                label: String::new(),
                range: self.y_range,
            },
        )
    }

    /// The plot rectangle as the viewer's plot area, px.
    fn area(&self) -> PlotArea {
        let (x0, y0, x1, y1) = self.pixels;
        PlotArea {
            x0: x0 as f64,
            y0: y0 as f64,
            x1: x1 as f64,
            y1: y1 as f64,
        }
    }
}

/// Largest distance (pt) an overlay polyline may move when simplified: a twentieth of a pixel
/// at 96 dpi.
const SIMPLIFY_PT: f64 = 0.0375;

/// Everything the base layer (background, heat map, axes, colour bar, line-cut panel) depends on.
#[derive(Clone, Debug, PartialEq)]
struct BaseKey {
    heat: LayerKey,
    window: (u32, u32),
    dpi_scale: f64,
    cut: Option<Cut>,
}

/// The base layer: the whole window without the map's overlays, the plot frame, the status line
/// and the transient boxes; opaque.
struct Base {
    key: BaseKey,
    pixmap: Pixmap,
    plot: Option<PlotGeometry>,
    /// The frame around the plot, drawn over the overlays.
    frame: Option<Item>,
}

/// Everything the kept overlay depends on apart from the viewport.
#[derive(Clone, Debug, PartialEq)]
struct OverlayContent {
    frame: FrameKind,
    overlays: super::state::Overlays,
    work: super::state::Work,
    /// Identity of the shared data (states, gate, n₀) and of the candidate lines.
    data: usize,
    lines: usize,
    rect: Rect,
    scale: f64,
    pixels: PixelRect,
}

/// The kept overlay's layer and what it was drawn for: drawn straight over the base it is
/// shown on (an opaque layer), so it is only shown on that base.
struct Overlay {
    content: OverlayContent,
    view: Viewport,
    /// The base it was drawn over (the renderer's count of bases made when it was drawn).
    base: usize,
    layer: OverlayLayer,
}

/// The frame's pieces as page items: the chrome (heat map, axes, colour bar, cut panel) laid
/// out as a figure, the plot geometry and the plot frame taken out of the chrome.
struct Chrome {
    fig: Figure,
    list: crate::figure::draw::DisplayList,
    plot: Option<PlotGeometry>,
    frame: Option<Item>,
}

fn chrome(s: &ViewState, w: u32, h: u32, heat: HeatMap, cut: Option<&Cut>) -> Result<Chrome> {
    let status = (STATUS_PX * s.dpi_scale).round() as u32;
    let fh = h.saturating_sub(status).max(50);
    let dpi = SCREEN_DPI * s.dpi_scale;
    let mm = |px: u32| px as f64 / dpi * 25.4;
    let mut fig = Figure::new(mm(w.max(50)), mm(fh));
    fig.dpi = dpi;
    fig.font_pt = 9.0;
    let axes = map_axes(s, Some(heat));
    let (x_range, y_range) = (axes.x_axis.range, axes.y_axis.range);
    fig.panels.push(axes);
    if let Some(p) = cut.and_then(cut_panel) {
        fig.columns = 2;
        fig.panels.push(p);
    }
    let mut list = layout(&fig)?;
    let scale = fig.pixel_size().0 as f64 / list.width;
    let plot = list.items.iter().find_map(|i| match i {
        Item::HeatMap { panel: 0, rect } => Some(PlotGeometry {
            rect: *rect,
            scale,
            pixels: pixel_rect(rect, scale),
            x_range,
            y_range,
        }),
        _ => None,
    });
    let frame = plot.and_then(|g| {
        let i = list.items.iter().position(|i| is_plot_frame(i, &g.rect))?;
        Some(list.items.remove(i))
    });
    Ok(Chrome {
        fig,
        list,
        plot,
        frame,
    })
}

/// The kept overlay of `s` as page items in the plot `g`: line outlines, lines, pick markers,
/// then the labels. Without clip rectangles: the caller clips to the plot (the overlay layer
/// covers exactly the plot's pixels, which clips as the plot's mask would).
fn kept_items(s: &ViewState, g: &PlotGeometry) -> Vec<Item> {
    let mut p = g.panel();
    add_kept_overlay(s, &mut p);
    let mut items = Vec::new();
    data_items(&p, &g.rect, SIMPLIFY_PT, &mut items);
    label_items(&p, &g.rect, &[], &mut items);
    for item in &mut items {
        if let Item::Path { clip, .. } = item {
            *clip = None;
        }
    }
    items
}

/// The pointer overlay of `s` as page items in the plot `g`, clipped to it.
fn pointer_items(s: &ViewState, g: &PlotGeometry) -> Vec<Item> {
    let mut p = g.panel();
    add_pointer_overlay(s, &mut p);
    let mut items = Vec::new();
    data_items(&p, &g.rect, SIMPLIFY_PT, &mut items);
    items
}

fn no_frame() -> fanmark_core::Error {
    fanmark_core::Error::invalid("viewer", "cannot allocate the frame")
}

/// The last heat-map layer: its key, its size (px) and its straight-alpha RGBA, shared.
type KeptLayer = (LayerKey, (u32, u32), Rc<Vec<u8>>);

/// Renders states to pixels, keeping the last heat map, base layer and overlay layer so that
/// a frame redraws only what its state changed.
#[derive(Default)]
pub struct Renderer {
    layer: Option<KeptLayer>,
    heat: Option<(LayerKey, HeatMap)>,
    base: Option<Base>,
    overlay: Option<Overlay>,
    /// Heat-map layers computed (for checks and benchmarks).
    pub layers_made: usize,
    /// Heat-map samplings that moved the last samples after a pan instead of sampling the
    /// whole view (for checks and benchmarks).
    pub heat_reused: usize,
    /// Overlay layers drawn (for checks and benchmarks).
    pub overlays_made: usize,
    /// Base layers drawn.
    bases_made: usize,
    /// The last settled plot (base with the overlay laid over it) that scaled interim frames
    /// resample, with the (bases, overlays) counts it was made at.
    settled_plot: Option<((usize, usize), Pixmap)>,
}

impl Overlay {
    /// Whether the layer may be shown on the base counted `base`: a transparent layer on any,
    /// an opaque one only on the base it was drawn over.
    fn shows_on(&self, base: usize) -> bool {
        !self.layer.is_opaque() || self.base == base
    }
}

/// Everything the kept overlay of `s` in the plot `g` depends on apart from the viewport.
fn overlay_content(s: &ViewState, g: &PlotGeometry) -> OverlayContent {
    OverlayContent {
        frame: s.frame,
        overlays: s.overlays.clone(),
        work: s.work.clone(),
        data: Arc::as_ptr(&s.data) as usize,
        lines: Arc::as_ptr(&s.lines) as usize,
        rect: g.rect,
        scale: g.scale,
        pixels: g.pixels,
    }
}

/// A rendered frame.
pub struct Rendered {
    /// Pixels (premultiplied RGBA), window size.
    pub pixmap: Pixmap,
    /// Plot area of the map panel, px.
    pub plot: Option<PlotArea>,
}

/// How a frame may reuse the kept overlay.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Reuse {
    /// Only when it was drawn for exactly this state (every settled frame).
    Exact,
    /// Also when only the viewport changed: the last settled heat map and overlay are shown
    /// moved by a pan (whole pixels) or scaled by a zoom (nearest neighbour, about the point
    /// the zoom keeps), the axes as they were (an interim frame while a drag or the wheel goes
    /// on; what comes into view and the new ticks appear when the motion pauses and a settled
    /// frame is drawn). See [`super::interim`].
    Interim,
}

/// How an interim frame shows the last settled plot in the new view.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Motion {
    /// Moved by whole window pixels (a pan).
    Shift((i64, i64)),
    /// Scaled through a pixel map (a zoom).
    Scale(PixelMap),
}

/// How the plot `g` showing `old` is shown for `new`: a shift when the view kept its size,
/// a scaling otherwise.
fn view_motion(old: &Viewport, new: &Viewport, g: &PlotGeometry) -> Option<Motion> {
    match view_shift(old, new, g) {
        Some(d) => Some(Motion::Shift(d)),
        None => PixelMap::between(old, new, g.pixels).map(Motion::Scale),
    }
}

impl Renderer {
    /// Render `s` into a `w`×`h` px window at `scale` physical px per logical px the way the
    /// window settles on it: resize, draw, take the plot area the layout found, and draw again
    /// until that area stops moving (at most four passes). Used off-screen and in benchmarks.
    pub fn render_settled(
        &mut self,
        s: &mut ViewState,
        w: u32,
        h: u32,
        scale: f64,
    ) -> Result<Rendered> {
        if (w, h) != s.window || scale != s.dpi_scale {
            s.apply(super::state::Action::Resize {
                width: w,
                height: h,
                scale,
            });
        }
        let mut r = self.render(s, w, h)?;
        for _ in 0..3 {
            match r.plot {
                Some(p) if p != s.plot => {
                    s.apply(super::state::Action::PlotArea(p));
                    r = self.render(s, w, h)?;
                }
                _ => break,
            }
        }
        Ok(r)
    }

    /// Render the state into a `w`×`h` px image: figure, status line, help overlay.
    pub fn render(&mut self, s: &ViewState, w: u32, h: u32) -> Result<Rendered> {
        self.render_with(s, w, h, Reuse::Exact)
    }

    /// Render the state, reusing the kept overlay as `reuse` allows.
    pub fn render_with(&mut self, s: &ViewState, w: u32, h: u32, reuse: Reuse) -> Result<Rendered> {
        let base_key = BaseKey {
            heat: heat_key_of(s),
            window: (w, h),
            dpi_scale: s.dpi_scale,
            cut: cut_of(s),
        };
        // An interim frame may show the last base with its plot moved by a pan or scaled by a
        // zoom; a scaled one also needs the overlay drawn for the base's own view.
        let motion = self.base.as_ref().and_then(|b| {
            let g = b.plot.as_ref()?;
            let mut moved = base_key.clone();
            moved.heat.view = b.key.heat.view;
            if reuse != Reuse::Interim || b.key == base_key || b.key != moved {
                return None;
            }
            match view_motion(&b.key.heat.view, &s.view, g)? {
                Motion::Scale(_)
                    if !matches!(&self.overlay, Some(o)
                        if o.view == b.key.heat.view
                            && o.shows_on(self.bases_made)
                            && o.content == overlay_content(s, g)) =>
                {
                    None
                }
                m => Some(m),
            }
        });
        if motion.is_none() && !matches!(&self.base, Some(b) if b.key == base_key) {
            let _ = self.heat_key(s);
            self.base = Some(self.make_base(s, w, h, base_key)?);
            self.bases_made += 1;
        }
        let Some(base) = &self.base else {
            unreachable!("the base layer was just stored")
        };
        let mut pm = copy_pixmap(&base.pixmap);
        match (motion, &base.plot) {
            (Some(Motion::Shift(d)), Some(g)) => {
                shift_region(&mut pm, &base.pixmap, g.pixels, d, MISSING_RGBA);
            }
            (Some(Motion::Scale(m)), Some(g)) => {
                // The settled plot (base and overlay) once per settled frame, then scaled.
                let made = (self.bases_made, self.overlays_made);
                if !matches!(&self.settled_plot, Some((k, _)) if *k == made) {
                    let mut plot = base.pixmap.clone();
                    if let Some(o) = &self.overlay {
                        o.layer.composite(&mut plot, (0, 0), g.pixels);
                    }
                    self.settled_plot = Some((made, plot));
                }
                if let Some((_, plot)) = &self.settled_plot {
                    scale_region(&mut pm, plot, g.pixels, &m, MISSING_RGBA);
                }
            }
            _ => {}
        }
        if let Some(g) = &base.plot {
            let content = overlay_content(s, g);
            let scaled = matches!(motion, Some(Motion::Scale(_)));
            let shift = self.overlay.as_ref().and_then(|o| {
                if o.content != content || !o.shows_on(self.bases_made) {
                    return None;
                }
                if o.view == s.view {
                    return Some((0, 0));
                }
                (reuse == Reuse::Interim)
                    .then(|| view_shift(&o.view, &s.view, g))
                    .flatten()
            });
            // A scaled interim frame has its overlay in the scaled plot already.
            let shift = if scaled { Some((0, 0)) } else { shift };
            let shift = match shift {
                Some(d) => d,
                None => {
                    let items = kept_items(s, g);
                    let bands = overlay_bands(g.pixels);
                    // Over the base itself, unless the frame shows the base moved (an interim
                    // frame): then transparent, to be laid over the moved picture.
                    let layer = if motion.is_some() {
                        OverlayLayer::draw(&items, g.scale, g.pixels, bands)
                    } else {
                        OverlayLayer::draw_over(&items, g.scale, g.pixels, bands, &base.pixmap)
                    }
                    .ok_or_else(no_frame)?;
                    self.overlays_made += 1;
                    self.overlay = Some(Overlay {
                        content,
                        view: s.view,
                        base: self.bases_made,
                        layer,
                    });
                    (0, 0)
                }
            };
            if let (Some(o), false) = (&self.overlay, scaled) {
                o.layer.composite(&mut pm, shift, g.pixels);
            }
            // Clip masks (for filled markers) are made as items ask for them.
            let mut masks = Vec::new();
            for item in &pointer_items(s, g) {
                draw_item(&mut pm, item, g.scale, (0.0, 0.0), &mut masks);
            }
            if let Some(f) = &base.frame {
                draw_item(&mut pm, f, g.scale, (0.0, 0.0), &mut masks);
            }
        }
        let plot = base.plot.map(|g| g.area());
        finish(&mut pm, s, plot);
        Ok(Rendered { pixmap: pm, plot })
    }

    /// Make sure the heat-map samples of `s` are kept; their key. After a pan by whole samples
    /// the kept samples are moved and only what came into view is sampled.
    fn heat_key(&mut self, s: &ViewState) -> LayerKey {
        let key = heat_key_of(s);
        if !matches!(&self.heat, Some((k, _)) if *k == key) {
            let (w, h) = (key.size.0 as usize, key.size.1 as usize);
            let (w, h) = (w.min(4096), h.min(4096));
            let heat = match self.heat.take() {
                Some((k, old)) if k.differs_only_in_view(&key) => {
                    let (heat, reused) = heat_after_pan(s, &k.view, old, w, h);
                    self.heat_reused += reused as usize;
                    heat
                }
                _ => heat_of(s, w, h),
            };
            self.heat = Some((key.clone(), heat));
        }
        key
    }

    /// Forget the kept heat-map samples, so that the next frame samples the whole view afresh
    /// (as before pans reused them; for benchmarks and checks).
    pub fn forget_heat_samples(&mut self) {
        self.heat = None;
    }

    fn make_base(&mut self, s: &ViewState, w: u32, h: u32, key: BaseKey) -> Result<Base> {
        let Some((_, full_heat)) = &self.heat else {
            unreachable!("the heat map is stored before the base")
        };
        // The figure carries a stand-in with the same colours, range and extent (all the layout
        // needs); the layer itself is drawn from the full samples, so no frame copies them.
        let c = chrome(s, w, h, light_heat(full_heat), key.cut.as_ref())?;
        let cache = &mut self.layer;
        let made = &mut self.layers_made;
        let heat_key = &key.heat;
        let mut source = |p: &Panel, m: &ColorMapping, pw: u32, ph: u32| -> Rc<Vec<u8>> {
            if let Some((k, size, img)) = cache.as_ref() {
                if k == heat_key && *size == (pw, ph) {
                    return Rc::clone(img);
                }
            }
            if p.heatmap.is_none() {
                return Rc::new(Vec::new());
            }
            let img = Rc::new(heatmap_layer(
                full_heat,
                m,
                p.x_axis.range,
                p.y_axis.range,
                pw,
                ph,
            ));
            *made += 1;
            *cache = Some((heat_key.clone(), (pw, ph), Rc::clone(&img)));
            img
        };
        let mut pixmap = filled_pixmap(w.max(1), h.max(1), [255; 4]).ok_or_else(no_frame)?;
        draw_list_onto(&mut pixmap, &c.fig, &c.list, &mut source);
        fill_outside_page(&mut pixmap, c.fig.pixel_size());
        Ok(Base {
            key,
            pixmap,
            plot: c.plot,
            frame: c.frame,
        })
    }
}

/// Colour of the plot where an interim frame has no heat map yet (as missing data).
const MISSING_RGBA: [u8; 4] = [40, 40, 40, 255];

/// Everything the heat-map layer of `s` depends on.
fn heat_key_of(s: &ViewState) -> LayerKey {
    let plot_w = (s.plot.x1 - s.plot.x0).max(2.0) as usize;
    let plot_h = (s.plot.y1 - s.plot.y0).max(2.0) as usize;
    LayerKey {
        frame: s.frame,
        channel: s.channel,
        palette: s.palette,
        scale: s.scale,
        clip_pct: s.clip_pct,
        view: s.view,
        size: (plot_w as u32, plot_h as u32),
    }
}

/// Whole window pixels the content moves by when the view goes from `old` to `new` of the same
/// size in the plot `g`; `None` when the size changed (a zoom).
fn view_shift(old: &Viewport, new: &Viewport, g: &PlotGeometry) -> Option<(i64, i64)> {
    let (wx, wy) = (old.x1 - old.x0, old.y1 - old.y0);
    let same = |a: f64, b: f64| (a - b).abs() <= 1e-9 * a.abs().max(b.abs());
    if !same(wx, new.x1 - new.x0) || !same(wy, new.y1 - new.y0) {
        return None;
    }
    let px = g.rect.width() * g.scale * (old.x0 - new.x0) / wx;
    let py = g.rect.height() * g.scale * (new.y0 - old.y0) / wy;
    (px.is_finite() && py.is_finite()).then(|| (px.round() as i64, py.round() as i64))
}

/// The whole frame of `s` drawn in one pass into one pixmap, without layers or caches: every
/// item straight onto the picture in the order the layered [`Renderer`] composites them. The
/// reference the cached frames are checked against.
pub fn render_direct(s: &ViewState, w: u32, h: u32) -> Result<Rendered> {
    let plot_w = (s.plot.x1 - s.plot.x0).max(2.0) as usize;
    let plot_h = (s.plot.y1 - s.plot.y0).max(2.0) as usize;
    let heat = heat_of(s, plot_w.min(4096), plot_h.min(4096));
    let cut = cut_of(s);
    let c = chrome(s, w, h, light_heat(&heat), cut.as_ref())?;
    let mut pm = Pixmap::new(w.max(1), h.max(1)).ok_or_else(no_frame)?;
    draw_list_onto(&mut pm, &c.fig, &c.list, &mut |p, m, pw, ph| {
        Rc::new(heatmap_layer(
            &heat,
            m,
            p.x_axis.range,
            p.y_axis.range,
            pw,
            ph,
        ))
    });
    fill_outside_page(&mut pm, c.fig.pixel_size());
    if let Some(g) = &c.plot {
        let mut masks = Vec::new();
        // The kept items drawn in place, then every pixel outside the plot put back: the clip.
        let outside = pm.clone();
        for item in &kept_items(s, g) {
            draw_overlay_item(&mut pm, item, g.scale, (0.0, 0.0), g.pixels, &mut masks);
        }
        restore_outside(&mut pm, &outside, g.pixels);
        for item in pointer_items(s, g).iter().chain(&c.frame) {
            draw_item(&mut pm, item, g.scale, (0.0, 0.0), &mut masks);
        }
    }
    let plot = c.plot.map(|g| g.area());
    finish(&mut pm, s, plot);
    Ok(Rendered { pixmap: pm, plot })
}

/// Rows of the plot in each band of the overlay layer: a band's pixels stay in a core's cache
/// while every line crosses it.
const OVERLAY_BAND_ROWS: i64 = 64;

/// Number of bands the overlay layer over `plot` is drawn in: one per [`OVERLAY_BAND_ROWS`]
/// rows, at most 32, but at least one per worker (and at least two).
fn overlay_bands(plot: PixelRect) -> usize {
    bands_for(plot.3 - plot.1, rayon::current_num_threads())
}

/// [`overlay_bands`] for a plot `rows` high drawn by `workers` threads.
fn bands_for(rows: i64, workers: usize) -> usize {
    let rows = rows.max(1);
    let by_rows = (rows + OVERLAY_BAND_ROWS - 1) / OVERLAY_BAND_ROWS;
    (by_rows as usize).min(32).max(workers).max(2)
}

/// Colour of the window around the figure's page (the status line's background).
const WINDOW_RGBA: [u8; 4] = [235, 235, 235, 255];

/// Fill every pixel of `pm` outside the top-left `page` (width, height) pixels with
/// [`WINDOW_RGBA`].
fn fill_outside_page(pm: &mut Pixmap, page: (u32, u32)) {
    let stride = pm.width() as usize * 4;
    let n = (page.0.min(pm.width()) as usize * 4).min(stride);
    for (y, row) in pm.data_mut().chunks_exact_mut(stride).enumerate() {
        let from = if (y as u32) < page.1 { n } else { 0 };
        for px in row[from..].chunks_exact_mut(4) {
            px.copy_from_slice(&WINDOW_RGBA);
        }
    }
}

/// Copy back from `before` every pixel of `pm` outside the half-open pixel rectangle `r`.
fn restore_outside(pm: &mut Pixmap, before: &Pixmap, r: PixelRect) {
    let w = pm.width() as i64;
    let src = before.data();
    for (i, px) in pm.data_mut().chunks_exact_mut(4).enumerate() {
        let (x, y) = (i as i64 % w, i as i64 / w);
        if x < r.0 || x >= r.2 || y < r.1 || y >= r.3 {
            px.copy_from_slice(&src[i * 4..i * 4 + 4]);
        }
    }
}

/// Draw the status line, the typing box or key map, and the readings box over the frame.
fn finish(pm: &mut Pixmap, s: &ViewState, plot: Option<PlotArea>) {
    let (w, h) = (pm.width(), pm.height());
    let px = (12.0 * s.dpi_scale) as f32;
    let base = h as f64 - 6.0 * s.dpi_scale;
    draw_string(pm, &status_text(s), 6.0 * s.dpi_scale, base, px, [0, 0, 0]);
    match &s.mode {
        Mode::Help => draw_help(pm, s.dpi_scale),
        Mode::Typing { text, purpose } => {
            let what = match purpose {
                super::state::TypingPurpose::NewLabel => "new label t s",
                super::state::TypingPurpose::Rename => "new text",
            };
            fill_rect(
                pm,
                0,
                0,
                w,
                (26.0 * s.dpi_scale) as u32,
                [255, 255, 200],
                240,
            );
            draw_string(
                pm,
                &format!("{what}: {text}▏  (Enter: done, Esc: cancel)"),
                8.0 * s.dpi_scale,
                18.0 * s.dpi_scale,
                px,
                [0, 0, 0],
            );
        }
        Mode::Normal => {}
    }
    if !s.readings.is_empty() || s.fit.is_some() {
        draw_readings(pm, s, plot);
    }
}

fn fmt_opt(v: Option<f64>, digits: usize) -> String {
    v.map_or("—".into(), |x| format!("{x:.digits$}"))
}

/// The status line: frame, channel, read-outs under the pointer, lines there, last message.
pub fn status_text(s: &ViewState) -> String {
    let mut t = format!("{} {}", s.frame.short(), s.channel.short());
    if let Some(r) = s.readout() {
        let (_, vf) = s.channel.label();
        t.push_str(&format!(
            "  Vg {:.3} V  n {:.4}e12 cm⁻²  D —  B {:.3} T  ν {:.2}  φ/φ₀ {}  n/n₀ {}  value {}",
            r.gate_v,
            r.n_m2 * 1e-16,
            r.b_t,
            r.nu,
            fmt_opt(r.phi_over_phi0, 3),
            fmt_opt(r.n_over_n0, 3),
            fmt_opt(r.value.map(|v| v * vf), 4),
        ));
        if !r.lines.is_empty() {
            let l: Vec<String> = r
                .lines
                .iter()
                .take(3)
                .map(|(a, b, _)| format!("({a},{b})"))
                .collect();
            t.push_str(&format!("  lines {}", l.join(" ")));
        }
    }
    t.push_str(&format!(
        "  picks {}  labels {}",
        s.work.picks.len(),
        s.work.labels.len()
    ));
    if !s.message.is_empty() {
        t.push_str(&format!("  · {}", s.message));
    }
    t
}

fn draw_readings(pm: &mut Pixmap, s: &ViewState, plot: Option<PlotArea>) {
    let d = s.dpi_scale;
    let x = plot.map_or(10.0, |p| p.x0 + 8.0 * d);
    let mut y = plot.map_or(30.0, |p| p.y0 + 16.0 * d);
    let mut lines = Vec::new();
    if let Some(f) = &s.fit {
        lines.push(format!(
            "free fit: t̂ = {:.3}  χ²ᵣ = {:.2}  ({} points)",
            f.slope / E_OVER_H,
            f.chi2_reduced,
            f.points
        ));
    }
    for (i, r) in s.readings.iter().take(6).enumerate() {
        let hall = r.hall.as_ref().map_or("—".to_string(), |h| {
            format!("{} ({:.2})", h.verdict, h.sigma_xy_e2h)
        });
        lines.push(format!(
            "{} {}  {:.2}σ  Hall {}",
            if i == s.chosen { "▶" } else { " " },
            super::state::ts_text(r.candidate.t, r.candidate.s),
            r.candidate.residual_sigma,
            hall
        ));
    }
    let h = (lines.len() as f64 * 15.0 + 8.0) * d;
    fill_rect(
        pm,
        (x - 4.0 * d) as i64 as u32,
        (y - 13.0 * d).max(0.0) as u32,
        (300.0 * d) as u32,
        h as u32,
        [255, 255, 255],
        220,
    );
    for l in lines {
        draw_string(pm, &l, x, y, (11.0 * d) as f32, [0, 0, 0]);
        y += 15.0 * d;
    }
}

fn draw_help(pm: &mut Pixmap, d: f64) {
    let lines = help_lines();
    let (w, h) = (pm.width(), pm.height());
    fill_rect(pm, 0, 0, w, h, [20, 20, 30], 225);
    let col_h = ((h as f64 - 40.0 * d) / (15.0 * d)).max(1.0) as usize;
    draw_string(
        pm,
        "fanmark viewer — keys",
        20.0 * d,
        22.0 * d,
        (14.0 * d) as f32,
        [255, 255, 255],
    );
    for (i, l) in lines.iter().enumerate() {
        let col = i / col_h;
        let row = i % col_h;
        draw_string(
            pm,
            l,
            20.0 * d + col as f64 * 420.0 * d,
            44.0 * d + row as f64 * 15.0 * d,
            (11.5 * d) as f32,
            if l.starts_with('—') {
                [255, 210, 120]
            } else {
                [235, 235, 235]
            },
        );
    }
}

/// Blend a rectangle of `color` at `alpha` (0…255) into the pixmap.
fn fill_rect(pm: &mut Pixmap, x: u32, y: u32, w: u32, h: u32, color: [u8; 3], alpha: u8) {
    let (pw, ph) = (pm.width(), pm.height());
    let data = pm.data_mut();
    let a = alpha as u32;
    for r in y..(y + h).min(ph) {
        for c in x..(x + w).min(pw) {
            let i = ((r * pw + c) * 4) as usize;
            for k in 0..3 {
                data[i + k] = ((color[k] as u32 * a + data[i + k] as u32 * (255 - a)) / 255) as u8;
            }
            data[i + 3] = 255;
        }
    }
}

/// Draw plain text with its baseline starting at (x, y) px.
pub fn draw_string(pm: &mut Pixmap, text: &str, x: f64, y: f64, px: f32, color: [u8; 3]) {
    let (pw, ph) = (pm.width() as i64, pm.height() as i64);
    let data = pm.data_mut();
    let mut pen = x;
    for c in text.chars() {
        let g = glyph(c, px);
        let (m, cov) = (&g.0, &g.1);
        let u0 = pen.round() as i64 + m.xmin as i64;
        let v0 = y.round() as i64 - m.ymin as i64 - m.height as i64;
        for gy in 0..m.height {
            for gx in 0..m.width {
                let a = cov[gy * m.width + gx] as u32;
                let (dx, dy) = (u0 + gx as i64, v0 + gy as i64);
                if a == 0 || dx < 0 || dy < 0 || dx >= pw || dy >= ph {
                    continue;
                }
                let d = ((dy * pw + dx) * 4) as usize;
                for k in 0..3 {
                    data[d + k] =
                        ((color[k] as u32 * a + data[d + k] as u32 * (255 - a)) / 255) as u8;
                }
            }
        }
        pen += m.advance_width as f64;
    }
}

#[cfg(test)]
mod tests {
    use super::bands_for;

    #[test]
    fn overlay_bands_follow_the_rows_but_never_fall_below_the_workers() {
        // 850 rows in bands of 64: 14 bands.
        assert_eq!(bands_for(850, 2), 14);
        // A short plot still gives each worker a band; a tall one stops at 32.
        assert_eq!(bands_for(40, 2), 2);
        assert_eq!(bands_for(40, 6), 6);
        assert_eq!(bands_for(10_000, 2), 32);
        // More workers than the row count asks for (a large machine): one each, no panic.
        assert_eq!(bands_for(10_000, 64), 64);
        assert_eq!(bands_for(0, 1), 2);
    }
}

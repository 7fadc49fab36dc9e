//! The viewer's whole state as plain data, changed only by [`Action`]s through
//! [`ViewState::apply`]. Nothing here touches the OS: the window turns events into actions and
//! carries out the [`Effect`]s the reducer asks for (saving, exporting, quitting).
//!
//! Coordinates: the viewport is in the current frame's units (x density-like, y field-like);
//! pointer positions are physical window pixels, y down.

use super::data::{ChannelChoice, ViewData};
use fanmark_core::constants::{E_OVER_H, FLUX_QUANTUM_H_OVER_E};
use fanmark_core::families::generate;
use fanmark_core::index::fit::{fit_line, index_fit, FitPoint, IndexBounds, LineFit, TsCandidate};
use fanmark_core::index::run::HallCheck;
use fanmark_core::index::score::complexity;
use fanmark_core::line::{Family, Frame, FramePoint, Line};
use fanmark_core::Rational;
use serde::{Deserialize, Serialize};
use std::sync::Arc;

/// The plane the map is drawn in.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum FrameKind {
    /// x = gate voltage V_g (V), y = B (T).
    GateField,
    /// x = density n (10¹² cm⁻² on screen, m⁻² inside), y = B (T).
    DensityField,
    /// x = filling factor ν, y = B (T).
    FillingField,
    /// x = n/n₀, y = φ/φ₀ (needs a moiré cell).
    Wannier,
}

impl FrameKind {
    /// Every frame in cycling order.
    pub const ALL: [FrameKind; 4] = [
        FrameKind::GateField,
        FrameKind::DensityField,
        FrameKind::FillingField,
        FrameKind::Wannier,
    ];

    /// Short name for the status line.
    pub fn short(self) -> &'static str {
        match self {
            FrameKind::GateField => "(Vg, B)",
            FrameKind::DensityField => "(n, B)",
            FrameKind::FillingField => "(ν, B)",
            FrameKind::Wannier => "(n/n₀, φ/φ₀)",
        }
    }
}

/// Value-to-colour scale of the heat map.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum ScaleKind {
    /// Linear.
    Linear,
    /// Logarithmic (non-positive values missing).
    Log,
    /// Symmetric logarithm for signed values.
    SymLog,
}

/// A rectangle of the current frame shown in the plot, x0 < x1, y0 < y1 (frame units, SI).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Viewport {
    /// Left edge.
    pub x0: f64,
    /// Right edge.
    pub x1: f64,
    /// Bottom edge.
    pub y0: f64,
    /// Top edge.
    pub y1: f64,
}

impl Viewport {
    fn valid(&self) -> bool {
        [self.x0, self.x1, self.y0, self.y1]
            .iter()
            .all(|v| v.is_finite())
            && self.x1 > self.x0
            && self.y1 > self.y0
    }
}

/// The plot area inside the window, physical pixels (x0 < x1, y0 < y1, y down).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct PlotArea {
    /// Left.
    pub x0: f64,
    /// Top.
    pub y0: f64,
    /// Right.
    pub x1: f64,
    /// Bottom.
    pub y1: f64,
}

/// Which overlays are drawn.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Overlays {
    /// Families whose predicted lines are drawn.
    pub families: Vec<Family>,
    /// Largest denominator of t and s among drawn lines and free-fit candidates.
    pub den_max: i64,
    /// Draw the indexer's detected states with their labels.
    pub show_states: bool,
    /// Highlight the line nearest the cursor.
    pub highlight: bool,
}

impl Default for Overlays {
    fn default() -> Self {
        Overlays {
            families: vec![Family::Integer],
            den_max: 3,
            show_states: true,
            highlight: true,
        }
    }
}

/// A point collected along a ridge: gate (V), field (T) and the density uncertainty (m⁻²).
#[derive(Clone, Copy, Debug, PartialEq, Serialize, Deserialize)]
pub struct Pick {
    /// Gate voltage, V.
    pub gate_v: f64,
    /// Field, T.
    pub field_t: f64,
    /// Standard uncertainty of the density at this point, m⁻².
    pub sigma_n_m2: f64,
}

/// A (t, s) reading of a free fit with its Hall check.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Reading {
    /// The candidate and its residual.
    pub candidate: TsCandidate,
    /// σ_xy along the line against t (None without R_xy).
    pub hall: Option<HallCheck>,
}

/// Why a label says what it says: the points, the free fit and the ranked readings.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, Default)]
pub struct Evidence {
    /// Points collected on the ridge.
    pub picks: Vec<Pick>,
    /// The free fit n = slope·B + intercept (None for a typed label).
    pub fit: Option<LineFit>,
    /// Ranked readings, best first.
    pub readings: Vec<Reading>,
}

/// A state the user has labelled.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Label {
    /// Stable id within the project.
    pub id: u64,
    /// Slope t (Hall conductance, e²/h).
    pub t: Rational,
    /// Intercept s (carriers per moiré cell).
    pub s: Rational,
    /// Text shown; empty means the automatic `(t, s)` text.
    pub text: String,
    /// Hidden labels are kept but not drawn.
    pub hidden: bool,
    /// Index into `evidence.readings` of the reading in use (0 for typed labels).
    pub reading: usize,
    /// Evidence.
    pub evidence: Evidence,
}

impl Label {
    /// The text drawn beside the line.
    pub fn shown_text(&self) -> String {
        if !self.text.is_empty() {
            self.text.clone()
        } else {
            ts_text(self.t, self.s)
        }
    }
}

/// `(t, s) = (…)` or `ν = …` text of a line.
pub fn ts_text(t: Rational, s: Rational) -> String {
    if s.is_zero() {
        format!("ν = {t}")
    } else {
        format!("({t}, {s})")
    }
}

/// What the line-cut panel shows.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum CutKind {
    /// No cut panel.
    Off,
    /// The channel along the row at the cursor's field.
    Row,
    /// The channel along the column at the cursor's gate voltage, versus B.
    Column,
    /// The channel versus B along the selected label's line (or the highlighted line).
    Line,
}

/// What the keyboard is doing.
#[derive(Clone, Debug, PartialEq)]
pub enum Mode {
    /// Keys are commands.
    Normal,
    /// The key-map overlay is shown.
    Help,
    /// Text entry: a new label's (t, s) or a new name for the selected label.
    Typing {
        /// What the text is for.
        purpose: TypingPurpose,
        /// Text so far.
        text: String,
    },
}

/// What typed text becomes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum TypingPurpose {
    /// `t s` of a new label, e.g. `2 0` or `-1/3 2/3`.
    NewLabel,
    /// Free text replacing the selected label's text.
    Rename,
}

/// A pointer drag in progress.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Drag {
    /// Left button: pan; `moved` stays false for a click.
    Pan {
        /// Press position, px.
        start: (f64, f64),
        /// Last position, px.
        last: (f64, f64),
        /// Moved beyond the click tolerance.
        moved: bool,
    },
    /// Right button: zoom box from `start` to the current pointer.
    Zoom {
        /// Press position, px.
        start: (f64, f64),
    },
    /// Shift + left button: collect snapped points along a ridge.
    Collect,
}

/// Pointer buttons the viewer uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Button {
    /// Primary.
    Left,
    /// Secondary.
    Right,
}

/// Every change the viewer knows.
#[derive(Clone, Debug, PartialEq)]
pub enum Action {
    /// The window's inner size (physical px) and scale factor changed.
    Resize {
        /// Width, px.
        width: u32,
        /// Height, px.
        height: u32,
        /// Physical px per logical px.
        scale: f64,
    },
    /// The plot area found by the layout of the last frame.
    PlotArea(PlotArea),
    /// Pointer moved to (x, y) px.
    Pointer(f64, f64),
    /// Pointer left the window.
    PointerLeft,
    /// Button pressed at the pointer; `shift` held.
    Press(Button, bool),
    /// Button released.
    Release(Button),
    /// Pan by (dx, dy) px (content follows the pointer).
    PanBy(f64, f64),
    /// Zoom by `factor` (> 1 zooms in) about (x, y) px.
    ZoomAt(f64, f64, f64),
    /// Zoom by `factor` about the pointer (or the plot centre).
    Zoom(f64),
    /// Zoom to the pixel rectangle between two corners.
    ZoomBox((f64, f64), (f64, f64)),
    /// Show the whole map.
    ResetView,
    /// Switch to a frame, keeping the physical point under the pointer.
    #[allow(dead_code)] // set directly by tests and, later, by a frame menu
    SetFrame(FrameKind),
    /// Next (+1) or previous (−1) available frame.
    CycleFrame(i32),
    /// Next or previous available channel.
    CycleChannel(i32),
    /// Next or previous palette.
    CyclePalette(i32),
    /// Next colour scale.
    CycleScale,
    /// Clip more (+) or less (−) of each tail, percent.
    Contrast(f64),
    /// Show or hide a line family.
    ToggleFamily(Family),
    /// Change the denominator bound by ±1.
    DenominatorBy(i64),
    /// Show or hide the indexer's states.
    ToggleStates,
    /// Turn highlighting of the line under the pointer on or off.
    ToggleHighlight,
    /// Snap the pointer to features on or off.
    ToggleSnap,
    /// Add the (snapped) point under the pointer to the ridge.
    PickHere,
    /// Drop the last collected point.
    DropPick,
    /// Drop every collected point.
    ClearPicks,
    /// Move the candidate cursor by ±1.
    CandidateBy(i32),
    /// Accept the chosen candidate as a label.
    Accept,
    /// Begin typing.
    BeginTyping(TypingPurpose),
    /// A typed character.
    Type(char),
    /// Delete the last typed character.
    Backspace,
    /// Finish typing.
    Commit,
    /// Leave help, typing or collecting.
    Cancel,
    /// Select the next (+1) or previous (−1) label.
    SelectBy(i32),
    /// Give the selected label the next reading of its evidence.
    Retarget,
    /// Hide or show the selected label.
    ToggleHidden,
    /// Delete the selected label.
    DeleteSelected,
    /// Undo the last change to the work.
    Undo,
    /// Redo.
    Redo,
    /// Next line-cut kind.
    CycleCut,
    /// Show or hide the key map.
    ToggleHelp,
    /// Save the project now.
    Save,
    /// Export the view as PNG, SVG and PDF.
    ExportView,
    /// Export the labels as CSV and JSON.
    ExportLabels,
    /// Export the line cut as CSV.
    ExportCut,
    /// Save and close.
    Quit,
}

/// Side effects the reducer asks the shell to carry out.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Effect {
    /// Write the project file.
    Save,
    /// Write the view as figures.
    ExportView,
    /// Write the labels.
    ExportLabels,
    /// Write the line cut.
    ExportCut,
    /// Close the window (after saving).
    Quit,
}

/// The undoable part of the state: labels and the ridge being collected.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize, Default)]
pub struct Work {
    /// Labels, in creation order.
    pub labels: Vec<Label>,
    /// Points collected for the next label.
    pub picks: Vec<Pick>,
    /// Next label id.
    pub next_id: u64,
    /// Selected label id.
    pub selected: Option<u64>,
}

/// The whole viewer state.
#[derive(Clone, Debug)]
pub struct ViewState {
    /// The data shown (shared, read-only).
    pub data: Arc<ViewData>,
    /// Frame.
    pub frame: FrameKind,
    /// Channel.
    pub channel: ChannelChoice,
    /// Index into `fanmark_core::palette::builtin()`.
    pub palette: usize,
    /// Colour scale.
    pub scale: ScaleKind,
    /// Percent of the values clipped at each end of the colour range.
    pub clip_pct: f64,
    /// Shown rectangle of the frame.
    pub view: Viewport,
    /// Window size, physical px.
    pub window: (u32, u32),
    /// Physical px per logical px.
    pub dpi_scale: f64,
    /// Plot area of the last layout, px.
    pub plot: PlotArea,
    /// Overlays.
    pub overlays: Overlays,
    /// Snap to features.
    pub snap: bool,
    /// Snap radius, logical px.
    pub snap_radius: f64,
    /// Labels and picks.
    pub work: Work,
    /// Index of the chosen candidate among the current readings.
    pub chosen: usize,
    /// Readings of the current picks (recomputed when the picks change).
    pub readings: Vec<Reading>,
    /// Free fit of the current picks.
    pub fit: Option<LineFit>,
    /// Pointer position, px.
    pub pointer: Option<(f64, f64)>,
    /// Drag in progress.
    pub drag: Option<Drag>,
    /// Keyboard mode.
    pub mode: Mode,
    /// Line cut.
    pub cut: CutKind,
    /// Undo history (older first) and redo stack.
    pub undo: Vec<Work>,
    /// Redo stack (most recent last).
    pub redo: Vec<Work>,
    /// Bumped by every change the project file records.
    pub revision: u64,
    /// Last message for the status line.
    pub message: String,
    /// Candidate lines of the stack (all families), drawn when their family is on.
    pub lines: Arc<Vec<Line>>,
}

/// Most undo steps kept.
const UNDO_LIMIT: usize = 500;
/// Widest view zooming out reaches, in each axis, as a multiple of the whole map's extent in
/// the frame.
pub const MAX_ZOOM_OUT: f64 = 4.0;
/// Pointer travel (px) below which a press and release is a click.
const CLICK_TOLERANCE: f64 = 4.0;

/// One read-out of the point under the pointer.
#[derive(Clone, Debug, PartialEq)]
pub struct Readout {
    /// Gate voltage, V.
    pub gate_v: f64,
    /// Density, m⁻².
    pub n_m2: f64,
    /// Field, T.
    pub b_t: f64,
    /// Filling factor ν = n h/(e B) (NaN at B = 0).
    pub nu: f64,
    /// Flux per moiré cell φ/φ₀ (None without a cell).
    pub phi_over_phi0: Option<f64>,
    /// n/n₀ (None without a cell).
    pub n_over_n0: Option<f64>,
    /// Channel value (SI) by interpolation, None outside the data.
    pub value: Option<f64>,
    /// Lines (t, s) within tolerance, nearest first, with their pixel distance.
    pub lines: Vec<(Rational, Rational, f64)>,
}

impl ViewState {
    /// A state showing all of `data` in the (V_g, B) frame, R_xx, in a 1280 × 800 window.
    pub fn new(data: Arc<ViewData>) -> ViewState {
        let spec = data.stack.family_spec();
        let lines = generate(&spec, None).unwrap_or_default();
        let mut st = ViewState {
            data,
            frame: FrameKind::GateField,
            channel: ChannelChoice::Rxx,
            palette: 0,
            scale: ScaleKind::Linear,
            clip_pct: 1.0,
            view: Viewport {
                x0: 0.0,
                x1: 1.0,
                y0: 0.0,
                y1: 1.0,
            },
            window: (1280, 800),
            dpi_scale: 1.0,
            plot: PlotArea {
                x0: 80.0,
                y0: 20.0,
                x1: 1100.0,
                y1: 700.0,
            },
            overlays: Overlays::default(),
            snap: true,
            snap_radius: 12.0,
            work: Work::default(),
            chosen: 0,
            readings: Vec::new(),
            fit: None,
            pointer: None,
            drag: None,
            mode: Mode::Normal,
            cut: CutKind::Off,
            undo: Vec::new(),
            redo: Vec::new(),
            revision: 0,
            message: String::new(),
            lines: Arc::new(lines),
        };
        st.view = st.full_view(st.frame);
        st
    }

    /// The core frame of `kind`, if this data can show it.
    pub fn frame_of(&self, kind: FrameKind) -> Option<Frame> {
        let n0 = self.data.n0_m2;
        match kind {
            FrameKind::GateField => Frame::gate_field(self.data.gate, n0).ok(),
            FrameKind::DensityField => Frame::density_field(n0).ok(),
            FrameKind::FillingField => Frame::filling_field(n0).ok(),
            FrameKind::Wannier => n0.and_then(|n| Frame::wannier(n).ok()),
        }
    }

    /// The current core frame.
    pub fn core_frame(&self) -> Frame {
        self.frame_of(self.frame)
            .or_else(|| self.frame_of(FrameKind::GateField))
            .expect("the gate frame exists for every calibrated map")
    }

    /// The frames this data can show.
    pub fn frames(&self) -> Vec<FrameKind> {
        FrameKind::ALL
            .into_iter()
            .filter(|k| self.frame_of(*k).is_some())
            .collect()
    }

    /// The rectangle showing the whole map in `kind`.
    pub fn full_view(&self, kind: FrameKind) -> Viewport {
        let m = &self.data.map;
        let (v0, v1) = (m.x().min(), m.x().max());
        let (b0, b1) = (m.y().min(), m.y().max());
        let g = self.data.gate;
        let (n0, n1) = {
            let (a, b) = (g.density(v0), g.density(v1));
            (a.min(b), a.max(b))
        };
        let Some(f) = self.frame_of(kind) else {
            return Viewport {
                x0: v0,
                x1: v1,
                y0: b0,
                y1: b1,
            };
        };
        let vp = match kind {
            FrameKind::FillingField => {
                // ν diverges at B → 0: show from a tenth of the top field, ν range at that field
                // scaled down to a readable fan.
                let lo = b0.max(0.1 * b1);
                let nu = n0.abs().max(n1.abs()) / (E_OVER_H * b1.max(1e-9)) * 2.0;
                Viewport {
                    x0: if n0 < 0.0 { -nu } else { 0.0 },
                    x1: if n1 > 0.0 { nu } else { 0.0 },
                    y0: lo,
                    y1: b1,
                }
            }
            _ => {
                let p = f.to_frame(n0, b0).ok();
                let q = f.to_frame(n1, b1).ok();
                match (p, q) {
                    (Some(p), Some(q)) => Viewport {
                        x0: p.x.min(q.x),
                        x1: p.x.max(q.x),
                        y0: p.y.min(q.y),
                        y1: p.y.max(q.y),
                    },
                    _ => Viewport {
                        x0: v0,
                        x1: v1,
                        y0: b0,
                        y1: b1,
                    },
                }
            }
        };
        if vp.valid() {
            vp
        } else {
            Viewport {
                x0: v0.min(v1 - 1.0),
                x1: v1,
                y0: b0.min(b1 - 1.0),
                y1: b1,
            }
        }
    }

    /// Frame point under pixel (px, py).
    pub fn px_to_frame(&self, px: f64, py: f64) -> (f64, f64) {
        let p = &self.plot;
        let u = (px - p.x0) / (p.x1 - p.x0);
        let v = (py - p.y0) / (p.y1 - p.y0);
        (
            self.view.x0 + u * (self.view.x1 - self.view.x0),
            self.view.y1 - v * (self.view.y1 - self.view.y0),
        )
    }

    /// Pixel of frame point (x, y).
    pub fn frame_to_px(&self, x: f64, y: f64) -> (f64, f64) {
        let p = &self.plot;
        let u = (x - self.view.x0) / (self.view.x1 - self.view.x0);
        let v = (self.view.y1 - y) / (self.view.y1 - self.view.y0);
        (p.x0 + u * (p.x1 - p.x0), p.y0 + v * (p.y1 - p.y0))
    }

    /// Physical point (gate V, n m⁻², B T) under pixel (px, py).
    pub fn px_to_physical(&self, px: f64, py: f64) -> Option<(f64, f64, f64)> {
        let (x, y) = self.px_to_frame(px, py);
        let (n, b) = self.core_frame().from_frame(FramePoint { x, y }).ok()?;
        Some((self.data.gate.gate_for_density(n), n, b))
    }

    /// Pixel of the physical point (n m⁻², B T), if the frame can show it.
    pub fn physical_to_px(&self, n: f64, b: f64) -> Option<(f64, f64)> {
        let p = self.core_frame().to_frame(n, b).ok()?;
        Some(self.frame_to_px(p.x, p.y))
    }

    fn centre(&self) -> (f64, f64) {
        (
            0.5 * (self.plot.x0 + self.plot.x1),
            0.5 * (self.plot.y0 + self.plot.y1),
        )
    }

    fn anchor(&self) -> (f64, f64) {
        match self.pointer {
            Some(p) if self.in_plot(p) => p,
            _ => self.centre(),
        }
    }

    /// True when pixel `p` lies inside the plot area.
    pub fn in_plot(&self, p: (f64, f64)) -> bool {
        p.0 >= self.plot.x0 && p.0 <= self.plot.x1 && p.1 >= self.plot.y0 && p.1 <= self.plot.y1
    }

    fn set_view(&mut self, v: Viewport) {
        if v.valid() && v != self.view {
            self.view = v;
            self.revision += 1;
        }
    }

    /// Zoom by `factor` (> 1 in) about the pixel (px, py), which keeps its place. Zooming out
    /// stops, axis by axis, where the view would grow past [`MAX_ZOOM_OUT`] times the whole
    /// map's extent in the frame (a view already wider is not made wider).
    fn zoom_at(&mut self, px: f64, py: f64, factor: f64) {
        if !(factor > 0.0 && factor.is_finite()) {
            return;
        }
        let (cx, cy) = self.px_to_frame(px, py);
        let v = self.view;
        let full = self.full_view(self.frame);
        // The factor along one axis: no smaller than what brings the view to the limit.
        let along = |now: f64, whole: f64| {
            let limit = MAX_ZOOM_OUT * whole.abs();
            if factor >= 1.0 || !(limit > 0.0 && limit.is_finite()) {
                return factor;
            }
            factor.max((now / limit).min(1.0))
        };
        let (fx, fy) = (
            along(v.x1 - v.x0, full.x1 - full.x0),
            along(v.y1 - v.y0, full.y1 - full.y0),
        );
        self.set_view(Viewport {
            x0: cx - (cx - v.x0) / fx,
            x1: cx + (v.x1 - cx) / fx,
            y0: cy - (cy - v.y0) / fy,
            y1: cy + (v.y1 - cy) / fy,
        });
    }

    fn pan_by(&mut self, dx: f64, dy: f64) {
        let p = &self.plot;
        let sx = (self.view.x1 - self.view.x0) / (p.x1 - p.x0);
        let sy = (self.view.y1 - self.view.y0) / (p.y1 - p.y0);
        let v = self.view;
        self.set_view(Viewport {
            x0: v.x0 - dx * sx,
            x1: v.x1 - dx * sx,
            y0: v.y0 + dy * sy,
            y1: v.y1 + dy * sy,
        });
    }

    fn set_frame(&mut self, kind: FrameKind) {
        if kind == self.frame {
            return;
        }
        let Some(new_frame) = self.frame_of(kind) else {
            self.message = format!("the {} frame needs a moiré cell", kind.short());
            return;
        };
        let (ax, ay) = self.anchor();
        let old_full = self.full_view(self.frame);
        let new_full = self.full_view(kind);
        let zx = (self.view.x1 - self.view.x0) / (old_full.x1 - old_full.x0);
        let zy = (self.view.y1 - self.view.y0) / (old_full.y1 - old_full.y0);
        let (wx, wy) = (
            zx.min(1.0) * (new_full.x1 - new_full.x0),
            zy.min(1.0) * (new_full.y1 - new_full.y0),
        );
        let target = self
            .px_to_physical(ax, ay)
            .and_then(|(_, n, b)| new_frame.to_frame(n, b).ok())
            .filter(|p| p.x.is_finite() && p.y.is_finite());
        self.frame = kind;
        match target {
            Some(p) => {
                let u = (ax - self.plot.x0) / (self.plot.x1 - self.plot.x0);
                let v = (ay - self.plot.y0) / (self.plot.y1 - self.plot.y0);
                let x0 = p.x - u * wx;
                let y1 = p.y + v * wy;
                self.view = Viewport {
                    x0,
                    x1: x0 + wx,
                    y0: y1 - wy,
                    y1,
                };
                if !self.view.valid() {
                    self.view = new_full;
                }
            }
            None => self.view = new_full,
        }
        self.revision += 1;
    }

    /// Channels this data has, in cycling order.
    pub fn channels(&self) -> Vec<ChannelChoice> {
        self.data.channels.iter().map(|c| c.choice).collect()
    }

    /// The feature nearest the pointer within the snap radius: (gate V, field T, width V).
    pub fn snapped(&self) -> Option<(f64, f64, f64)> {
        let p = self.pointer?;
        self.snap_near(p)
    }

    /// The feature nearest pixel `p` within the snap radius.
    pub fn snap_near(&self, p: (f64, f64)) -> Option<(f64, f64, f64)> {
        if !self.snap || !self.in_plot(p) {
            return None;
        }
        let (g, _, b) = self.px_to_physical(p.0, p.1)?;
        let near = self.data.features.nearest(g, b, 16).ok()?;
        let radius = self.snap_radius * self.dpi_scale;
        near.into_iter()
            .filter_map(|(_, m)| {
                let q = self.physical_to_px(self.data.gate.density(m.gate_v), m.field_t)?;
                let d = (q.0 - p.0).hypot(q.1 - p.1);
                (d <= radius).then_some((d, m))
            })
            .min_by(|a, b| a.0.total_cmp(&b.0))
            .map(|(_, m)| (m.gate_v, m.field_t, m.width_v))
    }

    /// The pick the pointer would add: the snapped feature, or the raw point when nothing is near.
    fn pick_at(&self, p: (f64, f64)) -> Option<Pick> {
        let alpha = self.data.gate.alpha_m2_per_v.abs();
        let step = self.data.map.x().median_step().abs();
        if let Some((g, b, w)) = self.snap_near(p) {
            // Full width at half prominence → σ of a Gaussian (FWHM = 2.355 σ), at least a step.
            let sigma_v = (w / 2.355).max(step);
            return Some(Pick {
                gate_v: g,
                field_t: b,
                sigma_n_m2: alpha * sigma_v,
            });
        }
        if !self.in_plot(p) {
            return None;
        }
        let (g, _, b) = self.px_to_physical(p.0, p.1)?;
        Some(Pick {
            gate_v: g,
            field_t: b,
            sigma_n_m2: alpha * 2.0 * step,
        })
    }

    fn record(&mut self) {
        self.undo.push(self.work.clone());
        if self.undo.len() > UNDO_LIMIT {
            self.undo.remove(0);
        }
        self.redo.clear();
    }

    fn changed_work(&mut self) {
        self.revision += 1;
        self.refit();
    }

    /// Recompute the free fit and readings of the current picks.
    pub fn refit(&mut self) {
        self.fit = None;
        self.readings.clear();
        self.chosen = 0;
        if self.work.picks.len() < 3 {
            return;
        }
        let pts: Vec<FitPoint> = self
            .work
            .picks
            .iter()
            .map(|p| FitPoint {
                n_m2: self.data.gate.density(p.gate_v),
                b_t: p.field_t,
                sigma_n_m2: p.sigma_n_m2,
            })
            .collect();
        let Ok(fit) = fit_line(&pts) else {
            return;
        };
        let bounds = IndexBounds {
            t_den_max: self.overlays.den_max.max(1),
            s_den_max: self.overlays.den_max.max(1),
            ..IndexBounds::default()
        };
        let (lo, hi) = self.pick_field_range();
        self.readings = index_fit(&fit, self.data.n0_m2, &bounds)
            .into_iter()
            .map(|c| Reading {
                hall: self.data.hall_check(c.t, c.s, lo, hi),
                candidate: c,
            })
            .collect();
        self.fit = Some(fit);
    }

    fn pick_field_range(&self) -> (f64, f64) {
        let b = self.work.picks.iter().map(|p| p.field_t);
        let lo = b.clone().fold(f64::INFINITY, f64::min);
        let hi = b.fold(f64::NEG_INFINITY, f64::max);
        (lo, hi)
    }

    fn add_label(&mut self, t: Rational, s: Rational, evidence: Evidence, reading: usize) {
        let id = self.work.next_id;
        self.work.next_id += 1;
        self.work.labels.push(Label {
            id,
            t,
            s,
            text: String::new(),
            hidden: false,
            reading,
            evidence,
        });
        self.work.selected = Some(id);
        self.message = format!("labelled {}", ts_text(t, s));
    }

    /// The selected label.
    pub fn selected(&self) -> Option<&Label> {
        let id = self.work.selected?;
        self.work.labels.iter().find(|l| l.id == id)
    }

    fn selected_mut(&mut self) -> Option<&mut Label> {
        let id = self.work.selected?;
        self.work.labels.iter_mut().find(|l| l.id == id)
    }

    /// Lines shown in the current overlay settings (predicted families, bounded denominators).
    pub fn shown_lines(&self) -> Vec<&Line> {
        let d = self.overlays.den_max;
        self.lines
            .iter()
            .filter(|l| self.overlays.families.contains(&l.family))
            .filter(|l| match l.ts() {
                Some((t, s)) => t.denom() <= d && s.denom() <= d,
                None => true,
            })
            .filter(|l| self.data.n0_m2.is_some() || l.ts().is_some_and(|(_, s)| s.is_zero()))
            .collect()
    }

    /// Candidate (t, s) lines within `tol_px` of the pointer, nearest first, then simplest:
    /// the shown lines, the detected states and the labels.
    pub fn lines_under_pointer(&self, tol_px: f64) -> Vec<(Rational, Rational, f64)> {
        let Some(p) = self.pointer else {
            return Vec::new();
        };
        let Some((_, _, b)) = self.px_to_physical(p.0, p.1) else {
            return Vec::new();
        };
        let mut ts: Vec<(Rational, Rational, Family)> = self
            .shown_lines()
            .iter()
            .filter_map(|l| l.ts().map(|(t, s)| (t, s, l.family)))
            .collect();
        if self.overlays.show_states {
            ts.extend(self.data.states.iter().map(|s| (s.t, s.s, Family::Wannier)));
        }
        ts.extend(
            self.work
                .labels
                .iter()
                .filter(|l| !l.hidden)
                .map(|l| (l.t, l.s, Family::Wannier)),
        );
        let n0 = self.data.n0_m2.unwrap_or(0.0);
        let mut out: Vec<(Rational, Rational, f64, f64)> = Vec::new();
        for (t, s, fam) in ts {
            if !s.is_zero() && self.data.n0_m2.is_none() {
                continue;
            }
            let n = t.to_f64() * E_OVER_H * b + s.to_f64() * n0;
            let Some(q) = self.physical_to_px(n, b) else {
                continue;
            };
            let d = (q.0 - p.0).abs();
            if d <= tol_px && !out.iter().any(|o| o.0 == t && o.1 == s) {
                out.push((t, s, d, complexity(fam, t, s)));
            }
        }
        out.sort_by(|a, b| a.2.total_cmp(&b.2).then(a.3.total_cmp(&b.3)));
        out.into_iter().map(|(t, s, d, _)| (t, s, d)).collect()
    }

    /// Everything the status line reports about the point under the pointer.
    pub fn readout(&self) -> Option<Readout> {
        let p = self.pointer?;
        if !self.in_plot(p) {
            return None;
        }
        let (g, n, b) = self.px_to_physical(p.0, p.1)?;
        let n0 = self.data.n0_m2;
        Some(Readout {
            gate_v: g,
            n_m2: n,
            b_t: b,
            nu: if b != 0.0 {
                n / (E_OVER_H * b)
            } else {
                f64::NAN
            },
            phi_over_phi0: n0.map(|n0| b / (FLUX_QUANTUM_H_OVER_E * n0)),
            n_over_n0: n0.map(|n0| n / n0),
            value: self.data.value_at(self.channel, g, b),
            lines: self.lines_under_pointer(8.0 * self.dpi_scale),
        })
    }

    /// Apply one action; returns the side effects to carry out.
    pub fn apply(&mut self, a: Action) -> Vec<Effect> {
        let mut fx = Vec::new();
        match a {
            Action::Resize {
                width,
                height,
                scale,
            } => {
                if width > 0 && height > 0 {
                    // Keep the plot area proportional until the next layout reports it.
                    let (ow, oh) = (self.window.0 as f64, self.window.1 as f64);
                    let (sx, sy) = (width as f64 / ow, height as f64 / oh);
                    self.plot = PlotArea {
                        x0: self.plot.x0 * sx,
                        y0: self.plot.y0 * sy,
                        x1: self.plot.x1 * sx,
                        y1: self.plot.y1 * sy,
                    };
                    self.window = (width, height);
                }
                if scale > 0.0 && scale.is_finite() {
                    self.dpi_scale = scale;
                }
            }
            Action::PlotArea(p) => {
                if p.x1 > p.x0 && p.y1 > p.y0 {
                    self.plot = p;
                }
            }
            Action::Pointer(x, y) => {
                let prev = self.pointer;
                self.pointer = Some((x, y));
                match self.drag {
                    Some(Drag::Pan { start, last, moved }) => {
                        let moved = moved || (x - start.0).hypot(y - start.1) > CLICK_TOLERANCE;
                        if moved {
                            self.pan_by(x - last.0, y - last.1);
                        }
                        self.drag = Some(Drag::Pan {
                            start,
                            last: (x, y),
                            moved,
                        });
                    }
                    Some(Drag::Collect) => {
                        if let Some(pk) = self.snap_near((x, y)).and_then(|_| self.pick_at((x, y)))
                        {
                            let dup = self
                                .work
                                .picks
                                .iter()
                                .any(|q| q.gate_v == pk.gate_v && q.field_t == pk.field_t);
                            if !dup {
                                self.work.picks.push(pk);
                                self.changed_work();
                            }
                        }
                    }
                    _ => {}
                }
                let _ = prev;
            }
            Action::PointerLeft => self.pointer = None,
            Action::Press(b, shift) => {
                let p = self.pointer.unwrap_or(self.centre());
                match (b, shift) {
                    (Button::Left, false) => {
                        self.drag = Some(Drag::Pan {
                            start: p,
                            last: p,
                            moved: false,
                        })
                    }
                    (Button::Left, true) => {
                        self.record();
                        self.drag = Some(Drag::Collect);
                        if let Some(pk) = self.pick_at(p) {
                            self.work.picks.push(pk);
                            self.changed_work();
                        }
                    }
                    (Button::Right, _) => self.drag = Some(Drag::Zoom { start: p }),
                }
            }
            Action::Release(_) => match self.drag.take() {
                Some(Drag::Pan { moved: false, .. }) => {
                    fx.extend(self.apply(Action::PickHere));
                }
                Some(Drag::Zoom { start }) => {
                    let end = self.pointer.unwrap_or(start);
                    if (end.0 - start.0).abs() > CLICK_TOLERANCE
                        && (end.1 - start.1).abs() > CLICK_TOLERANCE
                    {
                        self.apply(Action::ZoomBox(start, end));
                    }
                }
                _ => {}
            },
            Action::PanBy(dx, dy) => self.pan_by(dx, dy),
            Action::ZoomAt(x, y, f) => self.zoom_at(x, y, f),
            Action::Zoom(f) => {
                let (x, y) = self.anchor();
                self.zoom_at(x, y, f);
            }
            Action::ZoomBox(a, b) => {
                let (x0, y0) = self.px_to_frame(a.0.min(b.0), a.1.max(b.1));
                let (x1, y1) = self.px_to_frame(a.0.max(b.0), a.1.min(b.1));
                self.set_view(Viewport { x0, x1, y0, y1 });
            }
            Action::ResetView => {
                let v = self.full_view(self.frame);
                self.set_view(v);
            }
            Action::SetFrame(k) => self.set_frame(k),
            Action::CycleFrame(d) => {
                let fr = self.frames();
                if let Some(i) = fr.iter().position(|k| *k == self.frame) {
                    let j = (i as i32 + d).rem_euclid(fr.len() as i32) as usize;
                    self.set_frame(fr[j]);
                }
            }
            Action::CycleChannel(d) => {
                let ch = self.channels();
                let i = ch.iter().position(|c| *c == self.channel).unwrap_or(0);
                let j = (i as i32 + d).rem_euclid(ch.len() as i32) as usize;
                self.channel = ch[j];
                self.revision += 1;
            }
            Action::CyclePalette(d) => {
                let n = fanmark_core::palette::builtin().len().max(1) as i32;
                self.palette = (self.palette as i32 + d).rem_euclid(n) as usize;
                self.revision += 1;
            }
            Action::CycleScale => {
                self.scale = match self.scale {
                    ScaleKind::Linear => ScaleKind::Log,
                    ScaleKind::Log => ScaleKind::SymLog,
                    ScaleKind::SymLog => ScaleKind::Linear,
                };
                self.revision += 1;
            }
            Action::Contrast(d) => {
                self.clip_pct = (self.clip_pct + d).clamp(0.0, 20.0);
                self.revision += 1;
            }
            Action::ToggleFamily(f) => {
                if let Some(i) = self.overlays.families.iter().position(|x| *x == f) {
                    self.overlays.families.remove(i);
                } else {
                    self.overlays.families.push(f);
                }
                self.revision += 1;
            }
            Action::DenominatorBy(d) => {
                self.overlays.den_max = (self.overlays.den_max + d).clamp(1, 12);
                self.revision += 1;
                self.refit();
            }
            Action::ToggleStates => {
                self.overlays.show_states = !self.overlays.show_states;
                self.revision += 1;
            }
            Action::ToggleHighlight => {
                self.overlays.highlight = !self.overlays.highlight;
                self.revision += 1;
            }
            Action::ToggleSnap => {
                self.snap = !self.snap;
                self.revision += 1;
            }
            Action::PickHere => {
                if let Some(pk) = self.pointer.and_then(|p| self.pick_at(p)) {
                    self.record();
                    self.work.picks.push(pk);
                    self.changed_work();
                }
            }
            Action::DropPick => {
                if !self.work.picks.is_empty() {
                    self.record();
                    self.work.picks.pop();
                    self.changed_work();
                }
            }
            Action::ClearPicks => {
                if !self.work.picks.is_empty() {
                    self.record();
                    self.work.picks.clear();
                    self.changed_work();
                }
            }
            Action::CandidateBy(d) => {
                if !self.readings.is_empty() {
                    let n = self.readings.len() as i32;
                    self.chosen = (self.chosen as i32 + d).rem_euclid(n) as usize;
                }
            }
            Action::Accept => {
                if let Some(r) = self.readings.get(self.chosen).cloned() {
                    self.record();
                    let ev = Evidence {
                        picks: std::mem::take(&mut self.work.picks),
                        fit: self.fit,
                        readings: self.readings.clone(),
                    };
                    let chosen = self.chosen;
                    self.add_label(r.candidate.t, r.candidate.s, ev, chosen);
                    self.changed_work();
                } else {
                    self.message = "collect at least three points along a ridge first".into();
                }
            }
            Action::BeginTyping(purpose) => {
                if purpose == TypingPurpose::Rename && self.selected().is_none() {
                    self.message = "select a label first".into();
                } else {
                    self.mode = Mode::Typing {
                        purpose,
                        text: String::new(),
                    };
                }
            }
            Action::Type(c) => {
                if let Mode::Typing { text, .. } = &mut self.mode {
                    text.push(c);
                }
            }
            Action::Backspace => {
                if let Mode::Typing { text, .. } = &mut self.mode {
                    text.pop();
                }
            }
            Action::Commit => {
                if let Mode::Typing { purpose, text } = self.mode.clone() {
                    self.mode = Mode::Normal;
                    match purpose {
                        TypingPurpose::NewLabel => match parse_ts(&text) {
                            Some((t, s)) => {
                                self.record();
                                let ev = Evidence {
                                    picks: std::mem::take(&mut self.work.picks),
                                    ..Evidence::default()
                                };
                                self.add_label(t, s, ev, 0);
                                self.changed_work();
                            }
                            None => {
                                self.message = format!(
                                "`{text}` is not a label: type t and s, e.g. `2 0` or `-1/3 2/3`"
                            )
                            }
                        },
                        TypingPurpose::Rename => {
                            if self.selected().is_some() {
                                self.record();
                                if let Some(l) = self.selected_mut() {
                                    l.text = text;
                                }
                                self.changed_work();
                            }
                        }
                    }
                }
            }
            Action::Cancel => {
                if self.mode != Mode::Normal {
                    self.mode = Mode::Normal;
                } else if !self.work.picks.is_empty() {
                    self.apply(Action::ClearPicks);
                } else {
                    self.drag = None;
                }
            }
            Action::SelectBy(d) => {
                let ids: Vec<u64> = self.work.labels.iter().map(|l| l.id).collect();
                if !ids.is_empty() {
                    let i = self
                        .work
                        .selected
                        .and_then(|s| ids.iter().position(|x| *x == s))
                        .map(|i| (i as i32 + d).rem_euclid(ids.len() as i32))
                        .unwrap_or(if d >= 0 { 0 } else { ids.len() as i32 - 1 });
                    self.work.selected = Some(ids[i as usize]);
                }
            }
            Action::Retarget => {
                let can = self
                    .selected()
                    .is_some_and(|l| l.evidence.readings.len() > 1);
                if can {
                    self.record();
                    if let Some(l) = self.selected_mut() {
                        l.reading = (l.reading + 1) % l.evidence.readings.len();
                        let c = &l.evidence.readings[l.reading].candidate;
                        l.t = c.t;
                        l.s = c.s;
                    }
                    self.changed_work();
                } else {
                    self.message = "the selected label has no other reading".into();
                }
            }
            Action::ToggleHidden => {
                if self.selected().is_some() {
                    self.record();
                    if let Some(l) = self.selected_mut() {
                        l.hidden = !l.hidden;
                    }
                    self.changed_work();
                }
            }
            Action::DeleteSelected => {
                if let Some(id) = self.work.selected {
                    self.record();
                    self.work.labels.retain(|l| l.id != id);
                    self.work.selected = None;
                    self.changed_work();
                }
            }
            Action::Undo => {
                if let Some(w) = self.undo.pop() {
                    let now = std::mem::replace(&mut self.work, w);
                    self.redo.push(now);
                    self.changed_work();
                } else {
                    self.message = "nothing to undo".into();
                }
            }
            Action::Redo => {
                if let Some(w) = self.redo.pop() {
                    let now = std::mem::replace(&mut self.work, w);
                    self.undo.push(now);
                    self.changed_work();
                } else {
                    self.message = "nothing to redo".into();
                }
            }
            Action::CycleCut => {
                self.cut = match self.cut {
                    CutKind::Off => CutKind::Row,
                    CutKind::Row => CutKind::Column,
                    CutKind::Column => CutKind::Line,
                    CutKind::Line => CutKind::Off,
                };
                self.revision += 1;
            }
            Action::ToggleHelp => {
                self.mode = if self.mode == Mode::Help {
                    Mode::Normal
                } else {
                    Mode::Help
                };
            }
            Action::Save => fx.push(Effect::Save),
            Action::ExportView => fx.push(Effect::ExportView),
            Action::ExportLabels => fx.push(Effect::ExportLabels),
            Action::ExportCut => fx.push(Effect::ExportCut),
            Action::Quit => {
                fx.push(Effect::Save);
                fx.push(Effect::Quit);
            }
        }
        fx
    }
}

/// Parse typed `t s` (space or comma separated rationals); a single value means s = 0.
pub fn parse_ts(text: &str) -> Option<(Rational, Rational)> {
    let parts: Vec<&str> = text
        .split(|c: char| c == ',' || c.is_whitespace())
        .filter(|p| !p.is_empty())
        .collect();
    let r = |s: &str| s.replace('−', "-").parse::<Rational>().ok();
    match parts.as_slice() {
        [t] => Some((r(t)?, Rational::ZERO)),
        [t, s] => Some((r(t)?, r(s)?)),
        _ => None,
    }
}

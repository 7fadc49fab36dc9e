//! The figure scene: pure data describing a publication figure (panels with a heat map, axes,
//! secondary axes, colour bar, overlay lines, labels, markers and a legend). Every backend draws
//! from the same scene through the same layout, so a file and the viewer show the same content.
//!
//! Physical units: figure size in mm, line widths and font sizes in pt (1 pt = 1/72 in),
//! positions of overlays in data coordinates of the panel's primary axes.

use ndarray::Array2;
use std::sync::Arc;

/// Millimetres per typographic point (1 pt = 25.4/72 mm).
pub const MM_PER_PT: f64 = 25.4 / 72.0;

/// A whole figure: physical size, raster resolution, title and a grid of panels.
#[derive(Clone, Debug)]
pub struct Figure {
    /// Width of the figure in mm (a single journal column is about 86 mm, two columns 178 mm).
    pub width_mm: f64,
    /// Height of the figure in mm.
    pub height_mm: f64,
    /// Resolution of raster output in dots per inch; also written as PNG pHYs metadata.
    pub dpi: f64,
    /// Title above the panels (markup allowed, see [`super::text::parse_markup`]); empty for none.
    pub title: String,
    /// Base font size in pt for tick labels; axis labels use it too, the title is 1.2× larger.
    pub font_pt: f64,
    /// Number of panel columns; panels fill the grid row by row.
    pub columns: usize,
    /// The panels, in reading order.
    pub panels: Vec<Panel>,
}

impl Figure {
    /// An empty figure of the given size in mm at 300 dpi with 7 pt text.
    #[allow(dead_code)] // Built by the figure command and the viewer.
    pub fn new(width_mm: f64, height_mm: f64) -> Figure {
        Figure {
            width_mm,
            height_mm,
            dpi: 300.0,
            title: String::new(),
            font_pt: 7.0,
            columns: 1,
            panels: Vec::new(),
        }
    }

    /// Width in pt.
    pub fn width_pt(&self) -> f64 {
        self.width_mm / MM_PER_PT
    }

    /// Height in pt.
    pub fn height_pt(&self) -> f64 {
        self.height_mm / MM_PER_PT
    }

    /// Raster size in pixels at the figure's DPI (at least 1×1).
    pub fn pixel_size(&self) -> (u32, u32) {
        let px = |mm: f64| ((mm / 25.4 * self.dpi).round().max(1.0)) as u32;
        (px(self.width_mm), px(self.height_mm))
    }
}

/// How map values are turned into a position 0…1 along the colour table.
#[derive(Clone, Copy, Debug, PartialEq)]
#[allow(dead_code)] // Built by the figure command and the viewer.
pub enum ColorScale {
    /// Linear in the value.
    Linear,
    /// Logarithmic in the value; values ≤ 0 are shown as missing.
    Log,
    /// Symmetric logarithm: linear within ±`linear_threshold` (same unit as the values),
    /// logarithmic outside, for signed quantities such as R_xy or derivatives.
    SymLog {
        /// Half-width of the linear region around zero (> 0).
        linear_threshold: f64,
    },
}

/// Where the colour range comes from.
#[derive(Clone, Copy, Debug, PartialEq)]
#[allow(dead_code)] // Built by the figure command and the viewer.
pub enum ValueRange {
    /// Fixed limits (lower, upper) in the value's unit.
    Fixed(f64, f64),
    /// Percentiles of the finite values (lower, upper), each in 0…100, to clip outliers.
    Percentile(f64, f64),
}

/// How the heat map is resampled to output pixels.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[allow(dead_code)] // Built by the figure command and the viewer.
pub enum Resample {
    /// Each output pixel shows the nearest data point (cells are visible).
    Nearest,
    /// Values are interpolated bilinearly between the four surrounding data points.
    Bilinear,
}

/// A heat map: values on a (possibly non-uniform) rectangular grid and how to colour them.
#[derive(Clone, Debug)]
pub struct HeatMap {
    /// Values, shape (ny, nx): row i is at `y[i]`, column j at `x[j]`. NaN marks missing data.
    pub values: Array2<f64>,
    /// x coordinates of the columns, strictly monotone (increasing or decreasing).
    pub x: Vec<f64>,
    /// y coordinates of the rows, strictly monotone.
    pub y: Vec<f64>,
    /// Colour table: 256 sRGB entries from the low to the high end.
    pub colors: Vec<[u8; 3]>,
    /// Value-to-colour scale.
    pub scale: ColorScale,
    /// Colour range.
    pub range: ValueRange,
    /// Resampling to output pixels.
    pub resample: Resample,
    /// Colour of missing values; `None` leaves them transparent (figure background).
    pub missing: Option<[u8; 3]>,
}

/// A monotone map from a primary coordinate to a secondary one, e.g. density → filling factor.
pub type AxisFn = Arc<dyn Fn(f64) -> f64 + Send + Sync>;

/// A primary axis of a panel.
#[derive(Clone, Debug)]
pub struct AxisSpec {
    /// Axis label with units, markup allowed, e.g. `n (10^{12} cm^{−2})` or `B (T)`.
    pub label: String,
    /// Shown range (from, to) in data units; from > to flips the axis.
    pub range: (f64, f64),
}

/// A secondary axis (top or right) whose coordinate is a monotone function of the primary one.
#[derive(Clone)]
pub struct SecondaryAxis {
    /// Label of the secondary quantity, e.g. `ν` or `φ/φ_0`.
    pub label: String,
    /// Secondary coordinate as a function of the primary coordinate; must be monotone and
    /// finite over the primary axis range.
    pub map: AxisFn,
}

impl std::fmt::Debug for SecondaryAxis {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("SecondaryAxis")
            .field("label", &self.label)
            .finish_non_exhaustive()
    }
}

/// The colour bar beside a panel.
#[derive(Clone, Debug)]
pub struct ColorBar {
    /// Label with units, e.g. `R_{xx} (kΩ)`.
    pub label: String,
    /// Width of the bar in mm.
    pub width_mm: f64,
}

/// Stroke style of an overlay line.
#[derive(Clone, Debug, PartialEq)]
pub struct LineStyle {
    /// Line colour (sRGB).
    pub color: [u8; 3],
    /// Line width in pt.
    pub width_pt: f64,
    /// Dash pattern in pt (on, off, on, off…); empty for a solid line.
    pub dash_pt: Vec<f64>,
    /// Colour of a wider line drawn underneath for contrast against the heat map; `None` for none.
    pub outline: Option<[u8; 3]>,
}

impl LineStyle {
    /// A solid line of the given colour and width in pt, without outline.
    #[allow(dead_code)] // Built by the figure command and the viewer.
    pub fn solid(color: [u8; 3], width_pt: f64) -> LineStyle {
        LineStyle {
            color,
            width_pt,
            dash_pt: Vec::new(),
            outline: None,
        }
    }
}

/// An overlay polyline in data coordinates, clipped to the panel.
#[derive(Clone, Debug)]
pub struct Polyline {
    /// Vertices (x, y) in data units.
    pub points: Vec<(f64, f64)>,
    /// Style.
    pub style: LineStyle,
}

/// A text label anchored at a data point. Labels of a panel are placed so they neither overlap
/// each other nor leave the panel; the anchors are candidate positions tried in order (points
/// along the labelled line, for instance) and a label that fits nowhere is dropped.
#[derive(Clone, Debug)]
pub struct TextLabel {
    /// Text, markup allowed (e.g. `ν = 5/2`, `(t, s) = (−1, 2)`).
    pub text: String,
    /// Candidate anchor points in data units, tried in order; at least one.
    pub anchors: Vec<(f64, f64)>,
    /// Text colour.
    pub color: [u8; 3],
    /// Font size in pt.
    pub size_pt: f64,
    /// Box drawn behind the text for legibility; `None` for none.
    pub background: Option<[u8; 3]>,
}

/// Marker shapes.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[allow(dead_code)] // Built by the figure command and the viewer.
pub enum MarkerShape {
    /// Filled circle.
    Circle,
    /// Filled square.
    Square,
    /// Filled upward triangle.
    Triangle,
    /// Filled diamond.
    Diamond,
    /// Diagonal cross (stroked only).
    Cross,
}

/// A marker style.
#[derive(Clone, Debug, PartialEq)]
pub struct MarkerStyle {
    /// Shape.
    pub shape: MarkerShape,
    /// Size (outer diameter) in pt.
    pub size_pt: f64,
    /// Fill colour (stroke colour for the cross).
    pub fill: [u8; 3],
    /// Edge colour, drawn at 0.5 pt.
    pub edge: [u8; 3],
}

/// Markers at data points.
#[derive(Clone, Debug)]
pub struct Markers {
    /// Positions in data units.
    pub points: Vec<(f64, f64)>,
    /// Style.
    pub style: MarkerStyle,
}

/// The swatch shown in a legend entry.
#[derive(Clone, Debug)]
#[allow(dead_code)] // Built by the figure command and the viewer.
pub enum Swatch {
    /// A short line in this style.
    Line(LineStyle),
    /// A marker in this style.
    Marker(MarkerStyle),
}

/// One legend entry.
#[derive(Clone, Debug)]
pub struct LegendEntry {
    /// Swatch.
    pub swatch: Swatch,
    /// Text, markup allowed.
    pub text: String,
}

/// Which corner of the plot area holds the legend.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[allow(dead_code)] // Built by the figure command and the viewer.
pub enum Corner {
    /// Top left.
    TopLeft,
    /// Top right.
    TopRight,
    /// Bottom left.
    BottomLeft,
    /// Bottom right.
    BottomRight,
}

/// A legend inside the plot area.
#[derive(Clone, Debug)]
pub struct Legend {
    /// Entries, top to bottom.
    pub entries: Vec<LegendEntry>,
    /// Corner.
    pub corner: Corner,
}

/// One panel: a plot area with its axes, heat map, colour bar and overlays.
#[derive(Clone, Debug)]
pub struct Panel {
    /// Optional heat map.
    pub heatmap: Option<HeatMap>,
    /// Bottom axis.
    pub x_axis: AxisSpec,
    /// Left axis.
    pub y_axis: AxisSpec,
    /// Optional top axis (a function of x).
    pub top_axis: Option<SecondaryAxis>,
    /// Optional right axis (a function of y).
    pub right_axis: Option<SecondaryAxis>,
    /// Optional colour bar (needs a heat map).
    pub colorbar: Option<ColorBar>,
    /// Overlay polylines.
    pub lines: Vec<Polyline>,
    /// Text labels.
    pub labels: Vec<TextLabel>,
    /// Markers.
    pub markers: Vec<Markers>,
    /// Optional legend.
    pub legend: Option<Legend>,
}

impl Panel {
    /// A panel with the given axes and nothing in it.
    #[allow(dead_code)] // Built by the figure command and the viewer.
    pub fn new(x_axis: AxisSpec, y_axis: AxisSpec) -> Panel {
        Panel {
            heatmap: None,
            x_axis,
            y_axis,
            top_axis: None,
            right_axis: None,
            colorbar: None,
            lines: Vec::new(),
            labels: Vec::new(),
            markers: Vec::new(),
            legend: None,
        }
    }
}

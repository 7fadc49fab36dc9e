//! The display list: what the layout produces and every backend draws, in page pt (y down).
//! Keeping one list guarantees that PNG, SVG, PDF and the viewer show the same content.

use super::geom::Rect;
use super::text::TextBlock;

/// A stroke: colour, width in pt, dash pattern in pt (empty = solid).
#[derive(Clone, Debug, PartialEq)]
pub struct Stroke {
    /// sRGB colour.
    pub color: [u8; 3],
    /// Width, pt.
    pub width: f64,
    /// Dash pattern, pt.
    pub dash: Vec<f64>,
}

/// One thing to draw.
#[derive(Clone, Debug)]
pub enum Item {
    /// The heat map of panel `panel` filling `rect`, the panel's plot area.
    HeatMap {
        /// Index into the figure's panels.
        panel: usize,
        /// Plot area.
        rect: Rect,
    },
    /// The colour table of panel `panel` as a vertical strip, low end at the bottom.
    ColorStrip {
        /// Index into the figure's panels.
        panel: usize,
        /// Strip area.
        rect: Rect,
    },
    /// A polyline or polygon, optionally filled and/or stroked, optionally clipped.
    Path {
        /// Vertices, pt.
        points: Vec<(f64, f64)>,
        /// Close the path.
        closed: bool,
        /// Fill colour.
        fill: Option<[u8; 3]>,
        /// Stroke.
        stroke: Option<Stroke>,
        /// Clip rectangle.
        clip: Option<Rect>,
    },
    /// Text: `block` laid out with its baseline starting at (`x`, `y`); `vertical` turns it
    /// 90° counter-clockwise about that point (reading upwards).
    Text {
        /// Laid-out text.
        block: TextBlock,
        /// Baseline start x, pt.
        x: f64,
        /// Baseline y, pt.
        y: f64,
        /// Reading upwards.
        vertical: bool,
        /// Colour.
        color: [u8; 3],
    },
}

/// A laid-out figure.
#[derive(Clone, Debug)]
pub struct DisplayList {
    /// Page width, pt.
    pub width: f64,
    /// Page height, pt.
    pub height: f64,
    /// Items in drawing order.
    pub items: Vec<Item>,
    /// Labels that could not be placed without overlap, over all panels.
    #[allow(dead_code)] // Reported by the figure command.
    pub dropped_labels: usize,
    /// Resolved colour mapping per panel (None without heat map).
    pub mappings: Vec<Option<super::heatmap::ColorMapping>>,
}

impl DisplayList {
    /// All text items' plain characters, in drawing order (for checks and search).
    #[allow(dead_code)] // Used by checks and by the viewer's search.
    pub fn texts(&self) -> Vec<String> {
        self.items
            .iter()
            .filter_map(|i| match i {
                Item::Text { block, .. } => {
                    Some(block.spans.iter().map(|s| s.text.as_str()).collect())
                }
                _ => None,
            })
            .collect()
    }
}

//! Publication figures: a pure scene model ([`scene`]), its layout into a display list
//! ([`layout`], [`draw`]) and three backends drawing the same list: PNG ([`raster`]), SVG
//! ([`svg`]) and PDF ([`pdf`]). Scenes come from [`build`] (a map's heat map with lines and
//! states) and [`analysis`] (SdH, activation-gap and (n, D) figures).

pub mod analysis;
pub mod build;
pub mod draw;
pub mod geom;
pub mod hairline;
pub mod heatmap;
pub mod labels;
pub mod layout;
pub mod pdf;
pub mod raster;
pub mod scene;
pub mod stroke;
pub mod style;
pub mod svg;
pub mod text;
pub mod ticks;

#[cfg(test)]
mod golden;

use fanmark_core::Result;
use std::path::Path;

/// Output format of a figure file.
#[allow(dead_code)] // Entry point for the figure command and the viewer.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    /// PNG raster at the figure's DPI.
    Png,
    /// SVG vector document.
    Svg,
    /// PDF vector document.
    Pdf,
}

/// Encode the figure in `format`.
#[allow(dead_code)] // Entry point for the figure command and the viewer.
pub fn encode(fig: &scene::Figure, format: Format) -> Result<Vec<u8>> {
    match format {
        Format::Png => raster::png_bytes(fig),
        Format::Svg => svg::svg_string(fig).map(String::into_bytes),
        Format::Pdf => pdf::pdf_bytes(fig),
    }
}

/// Write the figure to `path` atomically in `format`.
#[allow(dead_code)] // Entry point for the figure command and the viewer.
pub fn write(fig: &scene::Figure, format: Format, path: &Path) -> Result<()> {
    fanmark_core::io::write::write_atomic(path, &encode(fig, format)?)
}

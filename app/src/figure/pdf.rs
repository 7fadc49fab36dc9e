//! PDF backend: the figure's SVG converted to PDF with the DejaVu Sans font embedded (as a
//! subset; text stays selectable). Page size is the figure's size in mm.

use super::scene::Figure;
use super::svg::svg_string;
use fanmark_core::{Error, Result};
use svg2pdf::usvg;

/// Convert an SVG document produced by [`super::svg`] to PDF bytes.
pub fn pdf_from_svg(svg: &str) -> Result<Vec<u8>> {
    let mut opts = usvg::Options::default();
    let db = opts.fontdb_mut();
    db.load_font_data(dejavu::sans::regular().to_vec());
    db.set_sans_serif_family(super::text::FONT_FAMILY);
    let tree = usvg::Tree::from_str(svg, &opts)
        .map_err(|e| Error::invalid("figure SVG", e.to_string()))?;
    // usvg sizes the document at 96 px per inch; a 96 dpi page keeps the size in mm.
    let page = svg2pdf::PageOptions { dpi: 96.0 };
    svg2pdf::to_pdf(&tree, svg2pdf::ConversionOptions::default(), page)
        .map_err(|e| Error::invalid("PDF conversion", e.to_string()))
}

/// Render the figure as PDF bytes.
pub fn pdf_bytes(fig: &Figure) -> Result<Vec<u8>> {
    pdf_from_svg(&svg_string(fig)?)
}

//! The figure options shared by the analysis commands (`sdh`, `gaps`, `dualgate`): where to
//! write the result's figure, how wide and at what resolution.

use super::figure::format_of;
use crate::figure::analysis::FigureSize;
use crate::figure::scene::Figure;
use crate::figure::text::escape_markup;
use anyhow::{bail, Context, Result};
use std::path::{Path, PathBuf};

/// Options of an analysis figure.
#[derive(clap::Args, Debug, Clone)]
pub struct FigureOut {
    /// Also draw the result as a figure: PNG, SVG or PDF by the file's extension.
    #[arg(long, value_name = "OUT.png|svg|pdf")]
    pub figure: Option<PathBuf>,
    /// Width of the figure, mm (86: one journal column); the height follows from the panels.
    #[arg(long, value_name = "MM", default_value_t = 86.0)]
    pub figure_width_mm: f64,
    /// Resolution of a PNG figure, dots per inch.
    #[arg(long, value_name = "DPI", default_value_t = 300.0)]
    pub figure_dpi: f64,
}

impl FigureOut {
    /// The requested size, checked.
    pub fn size(&self) -> Result<FigureSize> {
        if !(self.figure_width_mm >= 30.0 && self.figure_width_mm <= 500.0) {
            bail!(
                "--figure-width-mm {}: expected 30…500 mm",
                self.figure_width_mm
            );
        }
        if !(self.figure_dpi >= 50.0 && self.figure_dpi <= 2400.0) {
            bail!("--figure-dpi {}: expected 50…2400", self.figure_dpi);
        }
        Ok(FigureSize {
            width_mm: self.figure_width_mm,
            dpi: self.figure_dpi,
        })
    }

    /// Check the options before any work: a known extension and a sensible size.
    pub fn check(&self) -> Result<()> {
        if let Some(path) = &self.figure {
            format_of(path)?;
        }
        self.size().map(|_| ())
    }

    /// If a figure was asked for, build it with `build` at the requested size and write it
    /// atomically; prints where it went.
    pub fn write_with(
        &self,
        build: impl FnOnce(FigureSize) -> fanmark_core::Result<Figure>,
    ) -> Result<()> {
        let Some(path) = &self.figure else {
            return Ok(());
        };
        let format = format_of(path)?;
        let size = self.size()?;
        let fig = build(size).context("building the figure")?;
        crate::figure::write(&fig, format, path)
            .with_context(|| format!("writing {}", path.display()))?;
        eprintln!("figure written to {}", path.display());
        Ok(())
    }
}

/// A data file's name as figure-title markup (shown literally).
pub fn file_title(path: &Path) -> String {
    path.file_name()
        .map(|n| escape_markup(&n.to_string_lossy()))
        .unwrap_or_default()
}

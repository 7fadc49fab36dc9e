//! The project file: JSON with a format name and version, holding the data file and its
//! checksum, the calibration, the view, the overlay settings and every label with its evidence.
//! Written atomically (write, fsync, rename), so a crash leaves the old or the new file, never a
//! torn one.

use super::data::ChannelChoice;
use super::state::{CutKind, FrameKind, Label, Overlays, ScaleKind, ViewState, Viewport};
use fanmark_core::io::write::write_atomic;
use fanmark_core::{Error, Result};
use serde::{Deserialize, Serialize};
use std::path::{Path, PathBuf};

/// Format name written in every project file.
pub const FORMAT: &str = "fanmark-view-project";
/// Current format version.
pub const VERSION: u32 = 1;

/// The calibration the labels were made with.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ProjectCalibration {
    /// Lever arm α, m⁻²/V.
    pub alpha_m2_per_v: f64,
    /// Charge-neutrality gate voltage, V.
    pub v_cnp_v: f64,
    /// One carrier per moiré cell, m⁻² (null without a cell).
    pub n0_m2: Option<f64>,
}

/// The view settings.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct ProjectView {
    /// Frame.
    pub frame: FrameKind,
    /// Channel.
    pub channel: ChannelChoice,
    /// Palette name.
    pub palette: String,
    /// Colour scale.
    pub scale: ScaleKind,
    /// Percent clipped at each end of the colour range.
    pub clip_pct: f64,
    /// Shown rectangle in frame units (SI).
    pub viewport: Viewport,
    /// Line cut.
    pub cut: CutKind,
    /// Snapping on.
    pub snap: bool,
}

/// A whole project.
#[derive(Clone, Debug, PartialEq, Serialize, Deserialize)]
pub struct Project {
    /// Always [`FORMAT`].
    pub format: String,
    /// Format version.
    pub version: u32,
    /// Data file, relative to the project file's folder when possible (null for in-memory demo
    /// data).
    pub data_file: Option<PathBuf>,
    /// FNV-1a 64-bit checksum of the data file.
    pub data_checksum: String,
    /// Calibration.
    pub calibration: ProjectCalibration,
    /// View.
    pub view: ProjectView,
    /// Overlays.
    pub overlays: Overlays,
    /// Labels with their evidence.
    pub labels: Vec<Label>,
    /// Next label id.
    pub next_id: u64,
    /// Id of the selected label (null: none); absent in files written before it was kept.
    #[serde(default)]
    pub selected: Option<u64>,
}

/// The project of the current state; `project_path` makes the data path relative.
pub fn from_state(s: &ViewState, project_path: &Path) -> Project {
    let data_file = s.data.source.as_ref().map(|p| {
        let dir = project_path.parent().unwrap_or(Path::new(""));
        let abs = std::fs::canonicalize(p).unwrap_or(p.clone());
        let dir_abs = std::fs::canonicalize(dir).unwrap_or(dir.to_path_buf());
        abs.strip_prefix(&dir_abs)
            .map(Path::to_path_buf)
            .unwrap_or(abs)
    });
    let pals = fanmark_core::palette::builtin();
    Project {
        format: FORMAT.into(),
        version: VERSION,
        data_file,
        data_checksum: s.data.checksum.clone(),
        calibration: ProjectCalibration {
            alpha_m2_per_v: s.data.gate.alpha_m2_per_v,
            v_cnp_v: s.data.gate.v_cnp,
            n0_m2: s.data.n0_m2,
        },
        view: ProjectView {
            frame: s.frame,
            channel: s.channel,
            palette: pals[s.palette % pals.len()].name().to_string(),
            scale: s.scale,
            clip_pct: s.clip_pct,
            viewport: s.view,
            cut: s.cut,
            snap: s.snap,
        },
        overlays: s.overlays.clone(),
        labels: s.work.labels.clone(),
        next_id: s.work.next_id,
        selected: s.work.selected,
    }
}

/// Restore the view, overlays and labels of `p` into `s` (the data must already be the
/// project's). Settings the data cannot show (a missing channel) keep the state's own.
pub fn restore(p: &Project, s: &mut ViewState) {
    if s.frame_of(p.view.frame).is_some() {
        s.frame = p.view.frame;
    }
    if s.data.channel(p.view.channel).is_some() {
        s.channel = p.view.channel;
    }
    if let Some(i) = fanmark_core::palette::builtin()
        .iter()
        .position(|x| x.name() == p.view.palette)
    {
        s.palette = i;
    }
    s.scale = p.view.scale;
    s.clip_pct = p.view.clip_pct;
    s.view = p.view.viewport;
    s.cut = p.view.cut;
    s.snap = p.view.snap;
    s.overlays = p.overlays.clone();
    s.work.labels = p.labels.clone();
    s.work.next_id = p
        .next_id
        .max(p.labels.iter().map(|l| l.id + 1).max().unwrap_or(0));
    s.work.selected = p.selected.filter(|id| p.labels.iter().any(|l| l.id == *id));
    s.undo.clear();
    s.redo.clear();
    s.refit();
}

/// Serialise and write atomically.
pub fn save(path: &Path, p: &Project) -> Result<()> {
    let mut text = serde_json::to_string_pretty(p)
        .map_err(|e| Error::invalid("project", format!("could not be serialised: {e}")))?;
    text.push('\n');
    write_atomic(path, text.as_bytes())
}

/// Read a project file; errors name the file and what is wrong.
pub fn load(path: &Path) -> Result<Project> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| Error::invalid(path.display().to_string(), format!("cannot read: {e}")))?;
    let v: serde_json::Value = serde_json::from_str(&text).map_err(|e| {
        Error::invalid(
            path.display().to_string(),
            format!("not JSON (line {}, column {}): {e}", e.line(), e.column()),
        )
    })?;
    if v.get("format").and_then(|f| f.as_str()) != Some(FORMAT) {
        return Err(Error::invalid(
            path.display().to_string(),
            format!("field `format`: expected \"{FORMAT}\""),
        ));
    }
    match v.get("version").and_then(|f| f.as_u64()) {
        Some(x) if x as u32 == VERSION => {}
        other => {
            return Err(Error::invalid(
                path.display().to_string(),
                format!("field `version`: expected {VERSION}, got {other:?}"),
            ))
        }
    }
    serde_json::from_value(v).map_err(|e| {
        Error::invalid(
            path.display().to_string(),
            format!("not a viewer project: {e}"),
        )
    })
}

/// The data file of a project as a path (relative paths are from the project's folder).
pub fn data_path(p: &Project, project_path: &Path) -> Option<PathBuf> {
    p.data_file.as_ref().map(|d| {
        if d.is_absolute() {
            d.clone()
        } else {
            project_path.parent().unwrap_or(Path::new("")).join(d)
        }
    })
}

/// The project file that goes with a data file: `<stem>.view.json` beside it.
pub fn project_path_for(data: &Path) -> PathBuf {
    let stem = data
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "data".into());
    data.with_file_name(format!("{stem}.view.json"))
}

//! `fanmark view [FILE|PROJECT]`: explore a map in a window, snap to features, label states,
//! keep the labels in a project file, export. Without an argument: the demo moiré device.

use super::load_args::LoadArgs;
use crate::figure::raster::encode_png;
use crate::viewer::data::{fnv1a_hex, BuildOptions, ViewData};
use crate::viewer::draw::{Renderer, SCREEN_DPI};
use crate::viewer::project::{self, data_path, project_path_for};
use crate::viewer::state::ViewState;
use crate::viewer::window::{run as run_window, Outputs};
use anyhow::{bail, Context};
use fanmark_core::index::stack::Stack;
use fanmark_core::index::synthetic::synthesis_map;
use fanmark_core::io::load_map;
use fanmark_core::io::write::write_atomic;
use fanmark_core::progress::NoProgress;
use fanmark_core::synth::{generate, DeviceName, SynthConfig};
use std::path::{Path, PathBuf};
use std::sync::Arc;

/// Arguments of `fanmark view`.
#[derive(clap::Args, Debug)]
pub struct Args {
    /// Data file, or a viewer project (`*.view.json`); none: the demo moiré device.
    pub file: Option<PathBuf>,
    /// Device stack: monolayer, bilayer or monolayer-moire (default: monolayer-moire for the
    /// demo, monolayer otherwise).
    #[arg(long)]
    pub stack: Option<String>,
    /// Project file to keep the work in (default: `<data stem>.view.json` beside the data).
    #[arg(long, value_name = "FILE")]
    pub project: Option<PathBuf>,
    /// Open the project even though its data file has changed since the labels were made.
    #[arg(long)]
    pub accept_changed_data: bool,
    /// Skip the automatic calibration and indexing (faster start on large maps).
    #[arg(long)]
    pub no_index: bool,
    /// Draw the session off-screen into this PNG (exactly what the window would show, without
    /// a pointer) instead of opening a window.
    #[arg(long, value_name = "FILE.png")]
    pub render_to: Option<PathBuf>,
    /// Window size for `--render-to`, physical pixels.
    #[arg(long, value_name = "WIDTHxHEIGHT", default_value = "1280x800")]
    pub render_size: String,
    /// Physical pixels per logical pixel for `--render-to` (the window's scale factor).
    #[arg(long, value_name = "FACTOR", default_value_t = 1.0)]
    pub render_scale: f64,
    #[command(flatten)]
    pub load: LoadArgs,
}

/// Parse `WIDTHxHEIGHT` (both positive integers, at most 16384).
fn parse_size(text: &str) -> anyhow::Result<(u32, u32)> {
    let bad = || {
        anyhow::anyhow!("--render-size `{text}`: expected WIDTHxHEIGHT in pixels, e.g. 1280x800")
    };
    let (w, h) = text.split_once(['x', '×']).ok_or_else(bad)?;
    let w: u32 = w.trim().parse().map_err(|_| bad())?;
    let h: u32 = h.trim().parse().map_err(|_| bad())?;
    if w == 0 || h == 0 || w > 16384 || h > 16384 {
        return Err(bad());
    }
    Ok((w, h))
}

/// Draw `st` off-screen at `size` and `scale` and write it to `out` as PNG (atomically).
fn render_to(mut st: ViewState, out: &Path, size: (u32, u32), scale: f64) -> anyhow::Result<()> {
    if !(scale > 0.0 && scale.is_finite() && scale <= 8.0) {
        bail!("--render-scale {scale}: expected a factor between 0 and 8");
    }
    let r = Renderer::default().render_settled(&mut st, size.0, size.1, scale)?;
    let png = encode_png(&r.pixmap, SCREEN_DPI * scale)?;
    write_atomic(out, &png)?;
    println!(
        "fanmark view: rendered {} ({}×{})",
        out.display(),
        size.0,
        size.1
    );
    Ok(())
}

fn is_project(p: &Path) -> bool {
    p.to_string_lossy().ends_with(".view.json")
}

/// Load the data of `path` with its checksum.
fn load_data(path: &Path, a: &Args, stack: Stack) -> anyhow::Result<ViewData> {
    let bytes = std::fs::read(path).with_context(|| format!("reading {}", path.display()))?;
    let map = load_map(path, &a.load.options()?, &NoProgress)?;
    let mut o = BuildOptions::new(stack);
    o.index = !a.no_index;
    Ok(ViewData::build(
        map,
        Some(path.to_path_buf()),
        fnv1a_hex(&bytes),
        &o,
    )?)
}

/// Build the state and outputs `fanmark view` would open with (no window).
pub fn prepare(a: &Args) -> anyhow::Result<(ViewState, Outputs)> {
    let stack_of = |default: Stack| -> anyhow::Result<Stack> {
        Ok(match &a.stack {
            Some(s) => s.parse()?,
            None => default,
        })
    };
    match &a.file {
        Some(p) if is_project(p) => {
            let proj = project::load(p)?;
            let Some(data) = data_path(&proj, p) else {
                bail!("{}: the project has no data file (it was made on the built-in demo; open `fanmark view` with no argument and --project)", p.display());
            };
            let bytes = std::fs::read(&data).with_context(|| {
                format!(
                    "{}: its data file {} cannot be read",
                    p.display(),
                    data.display()
                )
            })?;
            let sum = fnv1a_hex(&bytes);
            if sum != proj.data_checksum && !a.accept_changed_data {
                bail!(
                    "{}: the data file {} has changed since the labels were made (checksum {} now, {} in the project); labels are not carried over silently — check the data, then reopen with --accept-changed-data",
                    p.display(),
                    data.display(),
                    sum,
                    proj.data_checksum
                );
            }
            let mut vd = load_data(&data, a, stack_of(Stack::Monolayer)?)?;
            // The labels were made with the project's calibration: keep it.
            vd.gate.alpha_m2_per_v = proj.calibration.alpha_m2_per_v;
            vd.gate.v_cnp = proj.calibration.v_cnp_v;
            vd.n0_m2 = proj.calibration.n0_m2;
            let mut st = ViewState::new(Arc::new(vd));
            project::restore(&proj, &mut st);
            if sum != proj.data_checksum {
                st.message = "data file changed since these labels were made".into();
            }
            let out = Outputs {
                project: a.project.clone().unwrap_or(p.clone()),
                export_stem: strip_view_json(p),
            };
            Ok((st, out))
        }
        Some(p) => {
            let vd = load_data(p, a, stack_of(Stack::Monolayer)?)?;
            let proj_path = a.project.clone().unwrap_or_else(|| project_path_for(p));
            let mut st = ViewState::new(Arc::new(vd));
            if proj_path.exists() {
                let proj = project::load(&proj_path)?;
                if proj.data_checksum != st.data.checksum && !a.accept_changed_data {
                    bail!(
                        "{}: the data file {} has changed since the labels were made (checksum {} now, {} in the project); reopen with --accept-changed-data after checking",
                        proj_path.display(),
                        p.display(),
                        st.data.checksum,
                        proj.data_checksum
                    );
                }
                project::restore(&proj, &mut st);
                if proj.data_checksum != st.data.checksum {
                    st.message = "data file changed since these labels were made".into();
                }
            }
            Ok((
                st,
                Outputs {
                    export_stem: strip_view_json(&proj_path),
                    project: proj_path,
                },
            ))
        }
        None => {
            let stack = stack_of(Stack::MonolayerMoire)?;
            let csv = PathBuf::from("demo-data/tern.csv");
            let vd = if csv.exists() {
                load_data(&csv, a, stack)?
            } else {
                let syn = generate(&SynthConfig::demo(DeviceName::Tern))?;
                let map = synthesis_map(&syn)?;
                let mut o = BuildOptions::new(stack);
                o.index = !a.no_index;
                ViewData::build(map, None, String::new(), &o)?
            };
            let proj_path = a
                .project
                .clone()
                .unwrap_or_else(|| PathBuf::from("tern.view.json"));
            let mut st = ViewState::new(Arc::new(vd));
            if proj_path.exists() {
                let proj = project::load(&proj_path)?;
                project::restore(&proj, &mut st);
            }
            Ok((
                st,
                Outputs {
                    export_stem: strip_view_json(&proj_path),
                    project: proj_path,
                },
            ))
        }
    }
}

fn strip_view_json(p: &Path) -> PathBuf {
    let s = p.to_string_lossy();
    PathBuf::from(s.strip_suffix(".view.json").unwrap_or(&s).to_string())
}

/// Run `fanmark view`.
pub fn run(a: Args) -> anyhow::Result<()> {
    let size = parse_size(&a.render_size)?;
    let (st, out) = prepare(&a)?;
    for n in &st.data.notes {
        eprintln!("note: {n}");
    }
    if let Some(png) = &a.render_to {
        return render_to(st, png, size, a.render_scale);
    }
    println!(
        "fanmark view: {} × {} map, {} features, {} states; project {}",
        st.data.map.shape().1,
        st.data.map.shape().0,
        st.data.features.points().len(),
        st.data.states.len(),
        out.project.display()
    );
    run_window(st, out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use clap::Parser;

    #[derive(Parser)]
    struct Cli {
        #[command(flatten)]
        view: Args,
    }

    fn args(list: &[&str]) -> Args {
        let mut v = vec!["view"];
        v.extend_from_slice(list);
        Cli::parse_from(v).view
    }

    fn demo_copy(dir: &Path) -> PathBuf {
        let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("../demo-data/wren.csv");
        let dst = dir.join("wren.csv");
        std::fs::copy(src, &dst).unwrap();
        dst
    }

    #[test]
    fn a_changed_data_file_is_reported_and_not_relabelled() {
        use crate::viewer::state::{Action, TypingPurpose};
        let dir = tempfile::tempdir().unwrap();
        let csv = demo_copy(dir.path());
        let csv_s = csv.to_str().unwrap();
        let (mut st, out) = prepare(&args(&[csv_s, "--no-index"])).unwrap();
        assert_eq!(out.project, dir.path().join("wren.view.json"));
        st.apply(Action::BeginTyping(TypingPurpose::NewLabel));
        st.apply(Action::Type('6'));
        st.apply(Action::Commit);
        project::save(&out.project, &project::from_state(&st, &out.project)).unwrap();
        // Unchanged data: both ways of opening restore the label without a warning.
        let proj_s = out.project.to_str().unwrap().to_string();
        for a in [csv_s, proj_s.as_str()] {
            let (st2, _) = prepare(&args(&[a, "--no-index"])).unwrap();
            assert_eq!(st2.work.labels.len(), 1);
            assert!(st2.message.is_empty(), "{}", st2.message);
        }
        // One more comment line: the map is the same, the file is not.
        let mut text = std::fs::read_to_string(&csv).unwrap();
        text.push_str("# edited after labelling\n");
        std::fs::write(&csv, text).unwrap();
        let before = std::fs::read(&out.project).unwrap();
        for a in [csv_s, proj_s.as_str()] {
            let e = format!("{:#}", prepare(&args(&[a, "--no-index"])).err().unwrap());
            assert!(e.contains("has changed since the labels were made"), "{e}");
            assert!(e.contains("--accept-changed-data"), "{e}");
            assert!(e.contains(&st.data.checksum), "names the old checksum: {e}");
        }
        assert_eq!(
            std::fs::read(&out.project).unwrap(),
            before,
            "project untouched"
        );
        // Accepted on purpose: opened with the labels and a warning on the status line.
        for a in [csv_s, proj_s.as_str()] {
            let (st3, _) = prepare(&args(&[a, "--no-index", "--accept-changed-data"])).unwrap();
            assert_eq!(st3.work.labels.len(), 1);
            assert!(st3.message.contains("data file changed"), "{}", st3.message);
        }
    }

    #[test]
    fn render_size_is_checked() {
        assert_eq!(parse_size("1600x1000").unwrap(), (1600, 1000));
        for bad in ["1600", "0x10", "ax10", "20000x10"] {
            let e = parse_size(bad).unwrap_err().to_string();
            assert!(e.contains("--render-size") && e.contains(bad), "{e}");
        }
    }
}

//! `fanmark view [FILE|PROJECT]`: explore a map in a window, snap to features, label states,
//! keep the labels in a project file, export. Without an argument: the demo moiré device.

use super::load_args::LoadArgs;
use crate::viewer::data::{fnv1a_hex, BuildOptions, ViewData};
use crate::viewer::project::{self, data_path, project_path_for};
use crate::viewer::state::ViewState;
use crate::viewer::window::{run as run_window, Outputs};
use anyhow::{bail, Context};
use fanmark_core::index::stack::Stack;
use fanmark_core::index::synthetic::synthesis_map;
use fanmark_core::io::load_map;
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
    #[command(flatten)]
    pub load: LoadArgs,
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
    let (st, out) = prepare(&a)?;
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

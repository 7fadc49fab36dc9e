//! `fanmark synth` (being written).

/// Arguments of `fanmark synth`.
#[derive(clap::Args, Debug)]
pub struct Args {}

/// Run `fanmark synth`.
pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("`synth` is not built yet")
}

//! `fanmark lines` (being written).

/// Arguments of `fanmark lines`.
#[derive(clap::Args, Debug)]
pub struct Args {}

/// Run `fanmark lines`.
pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("`lines` is not built yet")
}

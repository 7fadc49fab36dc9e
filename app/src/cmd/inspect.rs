//! `fanmark inspect` (being written).

/// Arguments of `fanmark inspect`.
#[derive(clap::Args, Debug)]
pub struct Args {}

/// Run `fanmark inspect`.
pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("`inspect` is not built yet")
}

//! `fanmark demo` (being written).

/// Arguments of `fanmark demo`.
#[derive(clap::Args, Debug)]
pub struct Args {}

/// Run `fanmark demo`.
pub fn run(_args: Args) -> anyhow::Result<()> {
    anyhow::bail!("`demo` is not built yet")
}

//! One module per subcommand: its clap arguments and its `run`.

pub mod demo;
pub mod inspect;
pub mod load_args;
pub mod lines;
pub mod synth;

//! One module per subcommand: its clap arguments and its `run`.

pub mod calibrate;
pub mod demo;
pub mod index;
pub mod inspect;
pub mod lines;
pub mod load_args;
pub mod palettes;
pub mod synth;
pub mod view;

//! One module per subcommand: its clap arguments and its `run`.

pub mod calibrate;
pub mod demo;
pub mod demo_quant;
pub mod dualgate;
pub mod figure;
pub mod figure_out;
pub mod gaps;
pub mod index;
pub mod inspect;
pub mod lines;
pub mod load_args;
pub mod palettes;
pub mod sdh;
pub mod synth;
pub mod view;

//! fanmark-core: the computation behind fanmark, a tool for Landau fans and Wannier diagrams
//! of gated graphene and moiré devices.
//!
//! SI inside: every stored value is SI (V, T, Ω, S, m⁻², K, V/m); conversions to the units
//! physicists quote (cm⁻², 10¹² cm⁻², V/nm, meV) happen at the edges through [`units`].
//! The library never prints, never exits and never panics on user data; errors are typed.

// `!(x > 0.0)` is used on purpose throughout: it is true for NaN, which is what a check that
// rejects bad values needs.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod colour;
pub mod constants;
pub mod error;
pub mod grid;
pub mod io;
pub mod map;
pub mod palette;
pub mod progress;
pub mod rational;
pub mod reframe;
pub mod synth;
pub mod units;

// Physics core.
pub mod conductivity;
pub mod derived;
pub mod dualgate;
pub mod families;
pub mod filling;
pub mod fit;
pub mod gaps;
pub mod gate;
pub mod hofstadter;
pub mod index;
pub mod line;
pub mod moire;
pub mod savgol;
pub mod sdh;
pub mod symmetrize;
pub mod transform;

pub use error::{Error, Result};
pub use map::{Axis, Channel, ChannelKind, Map, Quantity};
pub use rational::Rational;

//! fanmark's commands, figures and viewer as a library, so that the binary (`main.rs`), the
//! end-to-end tests and the benchmarks all use the same code.

// `!(x > y)` is used on purpose: it is true for NaN, which is what a check rejecting bad values
// needs.
#![allow(clippy::neg_cmp_op_on_partial_ord)]

pub mod cmd;
pub mod figure;
pub mod progress;
pub mod rows;
pub mod timing;
pub mod viewer;

//! Finding and indexing every gap of a Landau fan or Wannier diagram: feature maps, line
//! scoring, free fits, the Hall cross-check, classification and gate calibration from the data.

pub mod brown_zak;
pub mod calibrate;
pub mod features;
pub mod fit;
pub mod run;
pub mod score;
pub mod stack;
pub mod synthetic;

pub use run::{index_map, IndexOptions, IndexReport};

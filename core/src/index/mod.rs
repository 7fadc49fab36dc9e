//! Finding and indexing every gap of a Landau fan or Wannier diagram: feature maps, line
//! scoring, free fits, the Hall cross-check, classification and gate calibration from the data.

pub mod features;
pub mod synthetic;
pub mod score;
pub mod stack;
pub mod calibrate;
pub mod fit;
pub mod brown_zak;
pub mod run;

pub use run::{index_map, IndexOptions, IndexReport};

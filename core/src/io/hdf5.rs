//! HDF5 input (being written).
use crate::{error::Result, map::Map, progress::Progress};
use std::path::Path;
/// Load an HDF5 file.
pub fn load(path: &Path, _opts: &super::LoadOptions, _p: &dyn Progress) -> Result<Map> {
    Err(crate::error::Error::UnsupportedFormat {
        path: path.into(),
        message: "not yet".into(),
    })
}

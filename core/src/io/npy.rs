//! (being written)
use crate::{error::Result, map::Map, progress::Progress};
use std::path::Path;
/// Load a `.npy` array.
pub fn load_npy(path: &Path, _opts: &super::LoadOptions, _p: &dyn Progress) -> Result<Map> {
    Err(crate::error::Error::UnsupportedFormat {
        path: path.into(),
        message: ".npy not yet supported".into(),
    })
}
/// Load a `.npz` archive.
pub fn load_npz(path: &Path, _opts: &super::LoadOptions, _p: &dyn Progress) -> Result<Map> {
    Err(crate::error::Error::UnsupportedFormat {
        path: path.into(),
        message: ".npz not yet supported".into(),
    })
}

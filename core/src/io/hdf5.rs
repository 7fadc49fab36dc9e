//! HDF5 input (the `hdf5` feature): 1D axis datasets and 2D channel datasets, at the root of
//! the file or inside one group, found by name exactly as in `.npz` archives (x: `vg`, `gate`,
//! `vg_V`, `x`, …; y: `b`, `field`, `b_mT`, `y`, …; channels `rxx`, `rxy_kohm`, others by name)
//! or mapped with [`LoadOptions::columns`]. Mapped keys may name a dataset in a group as
//! `group/name`. Element types: float32/64 and int32/64, converted to f64 by the library.
//!
//! Which datasets are used: those at the root if it holds any, else those of the only group
//! that holds datasets. With several such groups, map the keys as `group/name`.

use super::npy::{assemble, ArrayEntry, ArraySource};
use super::LoadOptions;
use crate::error::{Error, Result};
use crate::map::Map;
use crate::progress::Progress;
use h5::types::{FloatSize, IntSize, TypeDescriptor};
use hdf5_metno as h5;
use std::path::Path;

fn h5_error(path: &Path, e: &h5::Error) -> Error {
    Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("HDF5: {e}"),
    }
}

/// Why an HDF5 element type is refused, if it is.
fn refusal(ds: &h5::Dataset) -> Option<String> {
    match ds.dtype().and_then(|t| t.to_descriptor()) {
        Ok(TypeDescriptor::Float(FloatSize::U4 | FloatSize::U8))
        | Ok(TypeDescriptor::Integer(IntSize::U4 | IntSize::U8)) => None,
        Ok(other) => Some(format!(
            "element type {other} is not supported; expected float64, float32, int32 or int64"
        )),
        Err(e) => Some(format!("element type cannot be read: {e}")),
    }
}

/// The datasets of one group, named relative to the file root with `prefix`.
fn datasets_of(
    path: &Path,
    group: &h5::Group,
    prefix: &str,
) -> Result<Vec<(ArrayEntry, h5::Dataset)>> {
    let mut out = Vec::new();
    for ds in group.datasets().map_err(|e| h5_error(path, &e))? {
        let full = ds.name();
        let short = full.rsplit('/').next().unwrap_or(&full).to_string();
        let name = if prefix.is_empty() {
            short
        } else {
            format!("{prefix}/{short}")
        };
        out.push((
            ArrayEntry {
                name,
                shape: ds.shape(),
                refused: refusal(&ds),
            },
            ds,
        ));
    }
    Ok(out)
}

/// An open HDF5 file as a source of named arrays.
struct H5Source<'a> {
    path: &'a Path,
    entries: Vec<ArrayEntry>,
    datasets: Vec<h5::Dataset>,
    progress: &'a dyn Progress,
    done: u64,
}

impl ArraySource for H5Source<'_> {
    fn entries(&self) -> &[ArrayEntry] {
        &self.entries
    }
    fn read(&mut self, index: usize) -> Result<Vec<f64>> {
        let e = &self.entries[index];
        let v = self.datasets[index]
            .read_raw::<f64>()
            .map_err(|err| Error::BadArrayFile {
                path: self.path.to_path_buf(),
                message: format!("dataset `{}`: {err}", e.name),
            })?;
        let want: usize = e.shape.iter().product();
        if v.len() != want {
            return Err(Error::BadArrayFile {
                path: self.path.to_path_buf(),
                message: format!(
                    "dataset `{}`: read {} values, its shape {:?} needs {want}",
                    e.name,
                    v.len(),
                    e.shape
                ),
            });
        }
        self.done += (v.len() * 8) as u64;
        self.progress.set(self.done);
        Ok(v)
    }
}

/// Load an HDF5 file into a [`Map`] in SI units.
pub fn load(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<Map> {
    let len = std::fs::metadata(path)
        .map_err(|source| Error::Io {
            path: path.to_path_buf(),
            source,
        })?
        .len();
    if len == 0 {
        return Err(Error::EmptyFile {
            path: path.to_path_buf(),
        });
    }
    let file = h5::File::open(path).map_err(|e| Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("not a readable HDF5 file: {e}"),
    })?;
    let root = datasets_of(path, &file, "")?;
    let mut groups = Vec::new();
    for g in file.groups().map_err(|e| h5_error(path, &e))? {
        let full = g.name();
        let name = full.trim_start_matches('/').to_string();
        let sets = datasets_of(path, &g, &name)?;
        if !sets.is_empty() {
            groups.push((name, sets));
        }
    }
    let by_path = opts.columns.iter().any(|(_, k)| k.contains('/'));
    let chosen: Vec<(ArrayEntry, h5::Dataset)> = if by_path {
        let mut all = root;
        for (_, sets) in groups {
            all.extend(sets);
        }
        all
    } else if !root.is_empty() {
        root
    } else if groups.len() == 1 {
        groups
            .pop()
            .map(|(_, sets)| {
                sets.into_iter()
                    .map(|(mut e, d)| {
                        e.name = e.name.rsplit('/').next().unwrap_or(&e.name).to_string();
                        (e, d)
                    })
                    .collect()
            })
            .unwrap_or_default()
    } else if groups.is_empty() {
        return Err(Error::Columns {
            path: path.to_path_buf(),
            message: "the HDF5 file holds no datasets at its root or in its groups".into(),
            found: String::new(),
            needed: "1D axis datasets and 2D channel datasets".into(),
        });
    } else {
        return Err(Error::Columns {
            path: path.to_path_buf(),
            message: "several groups hold datasets and none is at the root; map the keys as \
                      group/name (e.g. gate=scan1/vg,field=scan1/b,rxx=scan1/rxx)"
                .into(),
            found: groups
                .iter()
                .map(|(g, _)| g.as_str())
                .collect::<Vec<_>>()
                .join(", "),
            needed: "datasets at the root or in a single group".into(),
        });
    };
    let (entries, datasets) = chosen.into_iter().unzip();
    progress.start("reading HDF5", len);
    let mut src = H5Source {
        path,
        entries,
        datasets,
        progress,
        done: 0,
    };
    let map = assemble(path, "HDF5 file", &mut src, opts);
    progress.finish();
    map
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::progress::NoProgress;
    use ndarray::{arr1, Array2};

    fn scratch(name: &str) -> std::path::PathBuf {
        let d = std::env::temp_dir().join(format!("fanmark-h5-{}", std::process::id()));
        std::fs::create_dir_all(&d).unwrap();
        d.join(name)
    }

    #[test]
    fn root_datasets_with_units_and_orientation() {
        let p = scratch("root.h5");
        {
            let f = h5::File::create(&p).unwrap();
            f.new_dataset_builder()
                .with_data(&arr1(&[10.0, 0.0, -10.0])) // mV, decreasing
                .create("vg_mV")
                .unwrap();
            f.new_dataset_builder()
                .with_data(&arr1(&[0.0f32, 1.0]))
                .create("field")
                .unwrap();
            let rxx = Array2::from_shape_fn((2, 3), |(i, j)| (10 * i + j) as f64);
            f.new_dataset_builder()
                .with_data(&rxx)
                .create("rxx")
                .unwrap();
            // R_xy in kΩ as int32, stored (x, y).
            let rxy = Array2::from_shape_fn((3, 2), |(j, i)| (10 * i + j) as i32);
            f.new_dataset_builder()
                .with_data(&rxy)
                .create("rxy_kohm")
                .unwrap();
            let mask = Array2::from_elem((2, 3), 1u8);
            f.new_dataset_builder()
                .with_data(&mask)
                .create("mask")
                .unwrap();
        }
        let m = load(&p, &LoadOptions::default(), &NoProgress).unwrap();
        assert_eq!(m.x().values(), &[-0.01, 0.0, 0.01]);
        assert_eq!(m.y().values(), &[0.0, 1.0]);
        let rxx = &m.channel("rxx").unwrap().data;
        assert_eq!(rxx[[1, 0]], 12.0); // V_g = -10 mV was file column 2
        let rxy = &m.channel("rxy").unwrap().data;
        assert_eq!(rxy[[1, 0]], 12_000.0);
        assert!(m.channel("mask").is_none());
        assert!(m.meta.notes.iter().any(|n| n.contains("mask")));
    }

    #[test]
    fn single_group_mapping_and_errors() {
        let p = scratch("group.h5");
        {
            let f = h5::File::create(&p).unwrap();
            let g = f.create_group("scan").unwrap();
            g.new_dataset_builder()
                .with_data(&arr1(&[0.0, 1.0]))
                .create("V1")
                .unwrap();
            g.new_dataset_builder()
                .with_data(&arr1(&[2.0, 3.0, 4.0]))
                .create("B_magnet")
                .unwrap();
            g.new_dataset_builder()
                .with_data(&Array2::<f64>::ones((3, 2)))
                .create("R_4pt")
                .unwrap();
        }
        let e = load(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(e.contains("group.h5") && e.contains("V1 (2,)"), "{e}");
        let opts = LoadOptions {
            columns: crate::io::columns::parse_mapping("gate=V1,field=B_magnet,rxx=R_4pt").unwrap(),
            ..LoadOptions::default()
        };
        let m = load(&p, &opts, &NoProgress).unwrap();
        assert_eq!(m.shape(), (3, 2));
        assert_eq!(m.channel("rxx").unwrap().data[[2, 1]], 1.0);
        let opts = LoadOptions {
            columns: crate::io::columns::parse_mapping(
                "gate=scan/V1,field=scan/B_magnet,rxx=scan/R_4pt",
            )
            .unwrap(),
            ..LoadOptions::default()
        };
        assert_eq!(load(&p, &opts, &NoProgress).unwrap().shape(), (3, 2));

        let junk = scratch("junk.h5");
        std::fs::write(&junk, b"definitely not HDF5").unwrap();
        let e = load(&junk, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(e.contains("junk.h5") && e.contains("HDF5"), "{e}");
    }
}

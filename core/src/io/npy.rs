//! NumPy input: a `.npy` file holding one 2D channel, and `.npz` archives of named arrays.
//!
//! The `.npy` header (magic, version 1/2/3, header length, the `descr`, `fortran_order` and
//! `shape` entries) is parsed here, and the size it promises is checked against the bytes
//! actually present before anything is allocated, so a damaged or hostile header gives an error
//! rather than a huge allocation. Accepted element types: float64, float32, int32, int64 (either
//! byte order), converted to f64; anything else is refused by name.
//!
//! Arrays are `(ny, nx)` (rows along `y`, NumPy's row-major convention) or `(nx, ny)`; the
//! orientation is found by matching the axis lengths. A square array is taken as `(ny, nx)`.
//!
//! `.npz` archives: 1D arrays whose names recognise as coordinates are the axes (x: `vg`, `v_g`,
//! `gate`, `vg_V`, `x`, …; y: `b`, `field`, `b_T`, `y`, …, with units from the name such as
//! `b_mT`); every 2D array of matching shape is a channel (`rxx`, `rxy_kohm`, others under their
//! own name). [`LoadOptions::columns`] maps roles to keys explicitly; when it names a channel,
//! only the mapped channels are loaded. Only uncompressed archives (`np.savez`) are read.

use super::columns::{self, Recognised, Role};
use super::matrix::{
    build_axis, coordinate_header, make_channel, orient, push_reversal_notes, read_axis_file,
    MatrixHeaders, DEFAULT_X_HEADER, DEFAULT_Y_HEADER,
};
use super::LoadOptions;
use crate::error::{Error, Result};
use crate::map::Map;
use crate::progress::Progress;
use ndarray::{Array2, ArrayD, IxDyn, ShapeBuilder};
use std::io::Read;
use std::path::{Path, PathBuf};

/// The first six bytes of every `.npy` file.
pub(crate) const NPY_MAGIC: &[u8] = b"\x93NUMPY";

/// Largest header accepted (real headers are a few hundred bytes).
const MAX_HEADER_BYTES: usize = 1 << 20;
/// Bytes converted per step while reading an array body.
const CHUNK_BYTES: usize = 1 << 20;

// ---------------------------------------------------------------------------------------------
// The .npy header

/// Element type of an array, as its `descr` says.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub(crate) struct Dtype {
    /// `f` (float) or `i` (signed integer).
    kind: u8,
    /// Bytes per element.
    size: usize,
    /// Most significant byte first.
    big_endian: bool,
}

impl Dtype {
    /// Parse a `descr` string; `Err` holds a description of a refused type.
    fn parse(descr: &str) -> std::result::Result<Dtype, String> {
        let d = descr.as_bytes();
        let (order, rest) = match d.first() {
            Some(b'<' | b'>' | b'|' | b'=') => (d[0], &d[1..]),
            _ => (b'=', d),
        };
        let kind = rest.first().copied().unwrap_or(b'?');
        let size: Option<usize> = std::str::from_utf8(&rest[rest.len().min(1)..])
            .ok()
            .and_then(|s| s.parse().ok());
        let accepted = matches!((kind, size), (b'f', Some(4 | 8)) | (b'i', Some(4 | 8)));
        if !accepted {
            return Err(describe_refused(kind, size, descr));
        }
        Ok(Dtype {
            kind,
            size: size.unwrap_or(8),
            big_endian: order == b'>' || (order == b'=' && cfg!(target_endian = "big")),
        })
    }
    /// NumPy's name for the type, e.g. `float64`.
    fn name(self) -> String {
        format!(
            "{}{}",
            if self.kind == b'f' { "float" } else { "int" },
            self.size * 8
        )
    }
    /// Convert whole elements from raw bytes, appending to `out`.
    fn convert(self, bytes: &[u8], out: &mut Vec<f64>) {
        let be = self.big_endian;
        match (self.kind, self.size) {
            (b'f', 8) => out.extend(bytes.chunks_exact(8).map(|c| {
                let a: [u8; 8] = c.try_into().unwrap_or([0; 8]);
                if be {
                    f64::from_be_bytes(a)
                } else {
                    f64::from_le_bytes(a)
                }
            })),
            (b'f', _) => out.extend(bytes.chunks_exact(4).map(|c| {
                let a: [u8; 4] = c.try_into().unwrap_or([0; 4]);
                f64::from(if be {
                    f32::from_be_bytes(a)
                } else {
                    f32::from_le_bytes(a)
                })
            })),
            (_, 8) => out.extend(bytes.chunks_exact(8).map(|c| {
                let a: [u8; 8] = c.try_into().unwrap_or([0; 8]);
                (if be {
                    i64::from_be_bytes(a)
                } else {
                    i64::from_le_bytes(a)
                }) as f64
            })),
            _ => out.extend(bytes.chunks_exact(4).map(|c| {
                let a: [u8; 4] = c.try_into().unwrap_or([0; 4]);
                f64::from(if be {
                    i32::from_be_bytes(a)
                } else {
                    i32::from_le_bytes(a)
                })
            })),
        }
    }
}

/// A readable description of a refused `descr`.
fn describe_refused(kind: u8, size: Option<usize>, descr: &str) -> String {
    let bits = size.map(|s| s * 8);
    let name = match (kind, bits) {
        (b'c', Some(b)) => format!("complex{b}"),
        (b'b', _) | (b'?', _) => "bool".to_string(),
        (b'U', _) => "a unicode string".to_string(),
        (b'S', _) | (b'a', _) => "a byte string".to_string(),
        (b'O', _) => "Python objects".to_string(),
        (b'M', _) => "datetime64".to_string(),
        (b'm', _) => "timedelta64".to_string(),
        (b'V', _) => "raw void records".to_string(),
        (b'f', Some(b)) => format!("float{b}"),
        (b'i', Some(b)) => format!("int{b}"),
        (b'u', Some(b)) => format!("uint{b}"),
        _ => "an unknown type".to_string(),
    };
    format!(
        "element type `{descr}` ({name}) is not supported; expected float64, float32, int32 \
         or int64"
    )
}

/// What a `.npy` header says.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct NpyHeader {
    /// Element type, or why it is refused.
    dtype: std::result::Result<Dtype, String>,
    /// Column-major storage.
    fortran_order: bool,
    /// Array shape (empty for a scalar).
    shape: Vec<usize>,
    /// Bytes from the start of the file to the first element.
    data_offset: usize,
}

impl NpyHeader {
    /// Shape as NumPy prints it, e.g. `(50, 40)`.
    fn shape_text(&self) -> String {
        shape_text(&self.shape)
    }
    /// The element type or an error naming it.
    fn dtype_or_err(&self, path: &Path, what: &str) -> Result<Dtype> {
        self.dtype.clone().map_err(|m| Error::BadArrayFile {
            path: path.to_path_buf(),
            message: format!("{what}{m}"),
        })
    }
}

/// A shape as NumPy prints it.
fn shape_text(shape: &[usize]) -> String {
    match shape {
        [n] => format!("({n},)"),
        s => format!(
            "({})",
            s.iter()
                .map(|n| n.to_string())
                .collect::<Vec<_>>()
                .join(", ")
        ),
    }
}

/// A Python literal as found in a `.npy` header dict.
#[derive(Debug, Clone, PartialEq)]
enum PyValue {
    Str(String),
    Bool(bool),
    Int(u64),
    None,
    Seq(Vec<PyValue>),
    Dict(Vec<(String, PyValue)>),
}

/// A tiny parser for the literal dict in a `.npy` header.
struct PyParser<'a> {
    s: &'a [u8],
    i: usize,
}

impl PyParser<'_> {
    fn ws(&mut self) {
        while self.i < self.s.len() && self.s[self.i].is_ascii_whitespace() {
            self.i += 1;
        }
    }
    fn peek(&mut self) -> Option<u8> {
        self.ws();
        self.s.get(self.i).copied()
    }
    fn expect(&mut self, c: u8) -> std::result::Result<(), String> {
        if self.peek() == Some(c) {
            self.i += 1;
            Ok(())
        } else {
            Err(format!(
                "expected `{}` at header byte {}",
                c as char, self.i
            ))
        }
    }
    fn value(&mut self, depth: usize) -> std::result::Result<PyValue, String> {
        if depth > 16 {
            return Err("header nests too deeply".into());
        }
        match self.peek() {
            Some(q @ (b'\'' | b'"')) => {
                self.i += 1;
                let start = self.i;
                while self.i < self.s.len() && self.s[self.i] != q {
                    self.i += if self.s[self.i] == b'\\' { 2 } else { 1 };
                }
                if self.i >= self.s.len() {
                    return Err("unterminated string in header".into());
                }
                let text = String::from_utf8_lossy(&self.s[start..self.i]).into_owned();
                self.i += 1;
                Ok(PyValue::Str(text))
            }
            Some(open @ (b'(' | b'[')) => {
                let close = if open == b'(' { b')' } else { b']' };
                self.i += 1;
                let mut items = Vec::new();
                loop {
                    if self.peek() == Some(close) {
                        self.i += 1;
                        return Ok(PyValue::Seq(items));
                    }
                    items.push(self.value(depth + 1)?);
                    match self.peek() {
                        Some(b',') => self.i += 1,
                        Some(c) if c == close => {}
                        _ => return Err(format!("bad list or tuple at header byte {}", self.i)),
                    }
                }
            }
            Some(b'{') => {
                self.i += 1;
                let mut items = Vec::new();
                loop {
                    if self.peek() == Some(b'}') {
                        self.i += 1;
                        return Ok(PyValue::Dict(items));
                    }
                    let PyValue::Str(key) = self.value(depth + 1)? else {
                        return Err("header dict keys must be strings".into());
                    };
                    self.expect(b':')?;
                    let v = self.value(depth + 1)?;
                    items.push((key, v));
                    match self.peek() {
                        Some(b',') => self.i += 1,
                        Some(b'}') => {}
                        _ => return Err(format!("bad dict at header byte {}", self.i)),
                    }
                }
            }
            Some(c) if c.is_ascii_digit() => {
                let start = self.i;
                while self.i < self.s.len() && self.s[self.i].is_ascii_digit() {
                    self.i += 1;
                }
                let text = std::str::from_utf8(&self.s[start..self.i]).unwrap_or("");
                let n = text
                    .parse::<u64>()
                    .map_err(|_| format!("dimension {text} is too large"))?;
                if self.s.get(self.i) == Some(&b'L') {
                    self.i += 1;
                }
                Ok(PyValue::Int(n))
            }
            Some(c) if c.is_ascii_alphabetic() => {
                let start = self.i;
                while self.i < self.s.len() && self.s[self.i].is_ascii_alphanumeric() {
                    self.i += 1;
                }
                match &self.s[start..self.i] {
                    b"True" => Ok(PyValue::Bool(true)),
                    b"False" => Ok(PyValue::Bool(false)),
                    b"None" => Ok(PyValue::None),
                    w => Err(format!(
                        "unexpected word `{}` in header",
                        String::from_utf8_lossy(w)
                    )),
                }
            }
            Some(c) => Err(format!(
                "unexpected character `{}` at header byte {}",
                c as char, self.i
            )),
            None => Err("header ends early".into()),
        }
    }
}

/// Parse the header dict text into its three entries.
fn parse_header_dict(text: &[u8]) -> std::result::Result<(String, bool, Vec<usize>), String> {
    let mut p = PyParser { s: text, i: 0 };
    let PyValue::Dict(items) = p.value(0)? else {
        return Err("the header is not a dict".into());
    };
    let get = |k: &str| items.iter().find(|(key, _)| key == k).map(|(_, v)| v);
    let descr = match get("descr") {
        Some(PyValue::Str(s)) => s.clone(),
        Some(PyValue::Seq(_)) => {
            return Err(
                "the array has a structured (record) element type; expected a plain numeric \
                 array (float64, float32, int32 or int64)"
                    .into(),
            )
        }
        _ => return Err("the header has no `descr` string".into()),
    };
    let fortran = match get("fortran_order") {
        Some(PyValue::Bool(b)) => *b,
        _ => return Err("the header has no `fortran_order` True/False".into()),
    };
    let shape = match get("shape") {
        Some(PyValue::Seq(items)) => items
            .iter()
            .map(|v| match v {
                PyValue::Int(n) => {
                    usize::try_from(*n).map_err(|_| format!("dimension {n} is too large"))
                }
                _ => Err("`shape` must be a tuple of integers".to_string()),
            })
            .collect::<std::result::Result<Vec<_>, _>>()?,
        _ => return Err("the header has no `shape` tuple".into()),
    };
    Ok((descr, fortran, shape))
}

/// Read and parse a `.npy` header from `r`. `available` is the number of bytes the source
/// holds in total (file or archive entry), used to refuse a header longer than the data.
fn read_header<R: Read>(path: &Path, what: &str, r: &mut R, available: u64) -> Result<NpyHeader> {
    let bad = |message: String| Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("{what}{message}"),
    };
    let io = |e: std::io::Error| Error::Io {
        path: path.to_path_buf(),
        source: e,
    };
    if available == 0 {
        return Err(bad("the array data is empty (0 bytes)".into()));
    }
    let mut pre = [0u8; 8];
    read_fully(r, &mut pre).map_err(io)?.map_err(|n| {
        bad(format!(
            "only {n} bytes; not a .npy array (too short for its header)"
        ))
    })?;
    if &pre[..6] != NPY_MAGIC {
        return Err(bad(
            "not a .npy array (the magic bytes \\x93NUMPY are missing)".into(),
        ));
    }
    let major = pre[6];
    let len_bytes = match major {
        1 => 2,
        2 | 3 => 4,
        v => {
            return Err(bad(format!(
                ".npy format version {v}.{} is not supported (expected 1, 2 or 3)",
                pre[7]
            )))
        }
    };
    let mut lb = [0u8; 4];
    read_fully(r, &mut lb[..len_bytes])
        .map_err(io)?
        .map_err(|_| bad("the header length is cut off".into()))?;
    let header_len = u32::from_le_bytes(lb) as usize;
    let data_offset = 8 + len_bytes + header_len;
    if header_len > MAX_HEADER_BYTES || data_offset as u64 > available {
        return Err(bad(format!(
            "the header claims {header_len} bytes, but only {} bytes are present",
            available.saturating_sub(8 + len_bytes as u64)
        )));
    }
    let mut text = vec![0u8; header_len];
    read_fully(r, &mut text).map_err(io)?.map_err(|n| {
        bad(format!(
            "the header is cut off after {n} of {header_len} bytes"
        ))
    })?;
    let (descr, fortran_order, shape) =
        parse_header_dict(&text).map_err(|m| bad(format!("bad .npy header: {m}")))?;
    Ok(NpyHeader {
        dtype: Dtype::parse(&descr),
        fortran_order,
        shape,
        data_offset,
    })
}

/// Fill `buf` from `r`; `Ok(Err(n))` when the source ends after `n` bytes.
fn read_fully<R: Read>(
    r: &mut R,
    buf: &mut [u8],
) -> std::io::Result<std::result::Result<(), usize>> {
    let mut n = 0;
    while n < buf.len() {
        match r.read(&mut buf[n..]) {
            Ok(0) => return Ok(Err(n)),
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(Ok(()))
}

/// Check that the source holds exactly the bytes `header` promises (`available` counts from
/// the start of the array), before anything is allocated. Returns the element type, the
/// element count and the byte count of the body.
fn check_body_size(
    path: &Path,
    what: &str,
    header: &NpyHeader,
    available: u64,
) -> Result<(Dtype, usize, u64)> {
    let bad = |message: String| Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("{what}{message}"),
    };
    let dtype = header.dtype_or_err(path, what)?;
    let elements = header
        .shape
        .iter()
        .try_fold(1usize, |a, &n| a.checked_mul(n))
        .ok_or_else(|| bad(format!("shape {} is impossibly large", header.shape_text())))?;
    let expected = elements
        .checked_mul(dtype.size)
        .and_then(|b| u64::try_from(b).ok())
        .ok_or_else(|| bad(format!("shape {} is impossibly large", header.shape_text())))?;
    let present = available.saturating_sub(header.data_offset as u64);
    if present != expected {
        return Err(bad(format!(
            "{}: shape {} of {} needs {expected} bytes of data, but {present} bytes are present",
            if present < expected {
                "truncated array"
            } else {
                "unexpected bytes after the array"
            },
            header.shape_text(),
            dtype.name()
        )));
    }
    Ok((dtype, elements, expected))
}

/// Read the body after `header` from `r`, checking first that the source holds exactly the
/// bytes the header promises (`available` counts from the start of the array). Returns the
/// values in row-major (C) order. `progress_base` is added to the bytes reported.
fn read_body<R: Read>(
    path: &Path,
    what: &str,
    r: &mut R,
    header: &NpyHeader,
    available: u64,
    progress: &dyn Progress,
    progress_base: u64,
) -> Result<Vec<f64>> {
    let bad = |message: String| Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("{what}{message}"),
    };
    let (dtype, elements, expected) = check_body_size(path, what, header, available)?;
    let mut values = Vec::with_capacity(elements);
    let chunk = (CHUNK_BYTES / dtype.size) * dtype.size;
    let mut buf = vec![0u8; chunk.min(expected as usize)];
    let mut left = expected as usize;
    while left > 0 {
        let n = left.min(buf.len());
        read_fully(r, &mut buf[..n])
            .map_err(|e| Error::Io {
                path: path.to_path_buf(),
                source: e,
            })?
            .map_err(|got| {
                bad(format!(
                    "truncated array: expected {expected} bytes of data, found {}",
                    expected as usize - left + got
                ))
            })?;
        dtype.convert(&buf[..n], &mut values);
        left -= n;
        progress.set(progress_base + header.data_offset as u64 + (expected as usize - left) as u64);
    }
    if header.fortran_order && header.shape.len() > 1 {
        let a = ArrayD::from_shape_vec(IxDyn(&header.shape).f(), values)
            .map_err(|e| bad(format!("shape {}: {e}", header.shape_text())))?;
        values = a.as_standard_layout().iter().copied().collect();
    }
    Ok(values)
}

/// A whole `.npy` held in memory as an axis vector: 1D, or 2D with one dimension of 1.
pub(crate) fn axis_from_npy_bytes(path: &Path, bytes: &[u8]) -> Result<Vec<f64>> {
    let mut r = bytes;
    let h = read_header(path, "", &mut r, bytes.len() as u64)?;
    let n = match h.shape.as_slice() {
        [n] | [n, 1] | [1, n] => *n,
        _ => {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!(
                    "an axis file needs a 1D array, this one has shape {}",
                    h.shape_text()
                ),
            })
        }
    };
    let v = read_body(
        path,
        "",
        &mut r,
        &h,
        bytes.len() as u64,
        &crate::progress::NoProgress,
        0,
    )?;
    debug_assert_eq!(v.len(), n);
    Ok(v)
}

// ---------------------------------------------------------------------------------------------
// .npy: one channel

/// Load a `.npy` file holding one 2D array as a one-channel [`Map`] in SI units.
///
/// The channel's role and unit come from `opts.matrix.channel_header` (default `rxx_ohm`). The
/// axes come from `opts.matrix.x_axis_file` / `y_axis_file` (`.npy` 1D arrays or text), else
/// from sibling files `<stem>.x.npy` / `<stem>.y.npy`; without them the file is refused.
pub fn load_npy(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<Map> {
    let m = &opts.matrix;
    let h = MatrixHeaders::of(m)?;
    let (x_header, y_header) = (h.x, h.y);

    let (file, size) = super::open_nonempty(path)?;
    let mut r = std::io::BufReader::new(file);
    let header = read_header(path, "", &mut r, size)?;
    header.dtype_or_err(path, "")?;
    check_body_size(path, "", &header, size)?;
    let (a, b) = match header.shape.as_slice() {
        [a, b] => (*a, *b),
        _ => {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!(
                    "a .npy map needs a 2D array (rows, columns), this one has shape {}",
                    header.shape_text()
                ),
            })
        }
    };

    let x_path = axis_path(path, m.x_axis_file.as_deref(), "x");
    let y_path = axis_path(path, m.y_axis_file.as_deref(), "y");
    let (x_path, y_path) = match (x_path, y_path) {
        (Some(x), Some(y)) => (x, y),
        (x, _) => {
            let missing = if x.is_none() { "x" } else { "y" };
            return Err(Error::BadAxis {
                context: path.display().to_string(),
                axis: format!(
                    "{missing} ({})",
                    if missing == "x" { x_header } else { y_header }
                ),
                message: format!(
                    "a .npy file holds one array and no axis vectors: give the {missing} axis \
                     as a separate file (x_axis_file / y_axis_file), or place `{}` beside it",
                    sibling(path, missing).display()
                ),
            });
        }
    };
    let x_raw = read_axis_file(&x_path)?;
    let y_raw = read_axis_file(&y_path)?;
    let (nx, ny) = (x_raw.len(), y_raw.len());
    let transposed = if (a, b) == (ny, nx) {
        false
    } else if (a, b) == (nx, ny) {
        true
    } else {
        return Err(Error::BadAxis {
            context: path.display().to_string(),
            axis: format!("{x_header} / {y_header}"),
            message: format!(
                "the array has shape {}, but the axis files hold {nx} x values ({}) and {ny} \
                 y values ({}); expected ({ny}, {nx}) or ({nx}, {ny})",
                header.shape_text(),
                x_path.display(),
                y_path.display()
            ),
        });
    };

    progress.start("reading .npy", size);
    let values = read_body(path, "", &mut r, &header, size, progress, 0);
    progress.finish();
    let data = Array2::from_shape_vec((a, b), values?).map_err(|e| Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("shape {}: {e}", header.shape_text()),
    })?;
    let data = if transposed {
        data.reversed_axes().as_standard_layout().into_owned()
    } else {
        data
    };
    let (xc, yc) = (x_path.display().to_string(), y_path.display().to_string());
    h.map((&xc, &x_raw), (&yc, &y_raw), data, |map| {
        map.meta.notes.push(format!(
            ".npy array of shape {}; axes from {} and {}",
            header.shape_text(),
            x_path.display(),
            y_path.display()
        ));
        if transposed {
            map.meta
                .notes
                .push("array stored as (x, y); transposed to rows along y".into());
        } else if nx == ny {
            map.meta
                .notes
                .push("square array taken as rows along y (NumPy row-major convention)".into());
        }
    })
}

/// `<stem>.x.npy` beside `path`.
fn sibling(path: &Path, which: &str) -> PathBuf {
    let stem = path
        .file_stem()
        .map(|s| s.to_string_lossy().into_owned())
        .unwrap_or_default();
    path.with_file_name(format!("{stem}.{which}.npy"))
}

/// The axis file given, else the conventional sibling if it exists.
fn axis_path(path: &Path, given: Option<&Path>, which: &str) -> Option<PathBuf> {
    match given {
        Some(p) => Some(p.to_path_buf()),
        None => {
            let s = sibling(path, which);
            s.is_file().then_some(s)
        }
    }
}

// ---------------------------------------------------------------------------------------------
// Named arrays: shared by .npz and HDF5

/// One named array in a container file, before its data is read.
#[derive(Debug, Clone, PartialEq)]
pub(crate) struct ArrayEntry {
    /// Key (for `.npz`, the entry name without `.npy`; for HDF5, the dataset name).
    pub name: String,
    /// Shape.
    pub shape: Vec<usize>,
    /// Why the element type is refused, if it is.
    pub refused: Option<String>,
}

/// A container of named numeric arrays.
pub(crate) trait ArraySource {
    /// The arrays it holds.
    fn entries(&self) -> &[ArrayEntry];
    /// Read one array's values in row-major order, converted to f64.
    fn read(&mut self, index: usize) -> Result<Vec<f64>>;
}

/// The arrays of a container as one line for error messages: `vg (40,), rxx (50, 40)`.
fn entry_list(entries: &[ArrayEntry]) -> String {
    entries
        .iter()
        .map(|e| format!("{} {}", e.name, shape_text(&e.shape)))
        .collect::<Vec<_>>()
        .join(", ")
}

/// The unit of a key mapped explicitly to `role`: from the key's suffix if it has one that fits,
/// else the role's default.
fn mapped_recognised(path: &Path, role: &Role, key: &str) -> Result<Recognised> {
    let (_, unit_text) = columns::split_name_unit(key);
    let unit = match crate::units::parse_unit(&unit_text) {
        Some(u) if role.dimension().is_some_and(|d| d != u.dimension) => {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!(
                    "array `{key}` is mapped to {} but its unit `{unit_text}` measures {:?}",
                    role.name(),
                    u.dimension
                ),
            })
        }
        Some(u) if !unit_text.is_empty() => u,
        _ => role.default_unit(),
    };
    Ok(Recognised {
        role: role.clone(),
        unit,
    })
}

/// Which axis slot a coordinate role prefers: `Some('y')` for the field, `Some('x')` for the
/// gate-like coordinates.
fn slot_of(role: &Role) -> Option<char> {
    match role {
        Role::Field => Some('y'),
        Role::Gate | Role::TopGate | Role::Density => Some('x'),
        Role::BottomGate => Some('b'),
        _ => None,
    }
}

/// An axis candidate: entry index, the key's recognition, and its name.
#[derive(Debug, Clone)]
struct AxisPick {
    index: usize,
    rec: Recognised,
    name: String,
}

/// Build a map from a container of named arrays (`kind` names the container in messages, e.g.
/// `.npz archive`).
pub(crate) fn assemble(
    path: &Path,
    kind: &str,
    src: &mut dyn ArraySource,
    opts: &LoadOptions,
) -> Result<Map> {
    let entries = src.entries().to_vec();
    let context = path.display().to_string();
    let find = |key: &str| -> Result<usize> {
        entries
            .iter()
            .position(|e| e.name == key)
            .or_else(|| {
                entries
                    .iter()
                    .position(|e| e.name.eq_ignore_ascii_case(key))
            })
            .ok_or_else(|| Error::Columns {
                path: path.to_path_buf(),
                message: format!("the mapped key `{key}` is not in the {kind}"),
                found: entry_list(&entries),
                needed: "a key present in the file".into(),
            })
    };

    // Explicit mapping first.
    let mut x_pick: Option<AxisPick> = None;
    let mut y_pick: Option<AxisPick> = None;
    let mut mapped_channels: Vec<(usize, Recognised, String)> = Vec::new();
    for (role, key) in &opts.columns {
        let index = find(key)?;
        let rec = mapped_recognised(path, role, key)?;
        let name = entries[index].name.clone();
        if role.is_coordinate() {
            let pick = AxisPick { index, rec, name };
            match slot_of(role) {
                Some('y') => y_pick = Some(pick),
                Some('x') => x_pick = Some(pick),
                Some(_) if x_pick.is_none() => x_pick = Some(pick),
                Some(_) => y_pick = Some(pick),
                None => {
                    return Err(Error::Columns {
                        path: path.to_path_buf(),
                        message: format!(
                            "`{key}` is mapped to {}, which cannot be a map axis",
                            role.name()
                        ),
                        found: entry_list(&entries),
                        needed: "gate, top_gate, bottom_gate, density or field as axes".into(),
                    })
                }
            }
        } else {
            mapped_channels.push((index, rec, name));
        }
    }

    // Axes by name where not mapped.
    let x_header = opts.matrix.x_header.as_deref().unwrap_or(DEFAULT_X_HEADER);
    let y_header = opts.matrix.y_header.as_deref().unwrap_or(DEFAULT_Y_HEADER);
    let mut temperature: Option<f64> = None;
    let mut cands: Vec<(char, AxisPick)> = Vec::new();
    for (index, e) in entries.iter().enumerate() {
        if e.refused.is_some() {
            continue;
        }
        let elements: usize = e.shape.iter().product();
        let Ok(rec) = columns::recognise(&e.name) else {
            continue;
        };
        if rec.role == Role::Temperature && elements == 1 {
            let v = src.read(index)?;
            temperature = v.first().map(|t| t * rec.unit.to_si);
            continue;
        }
        if e.shape.len() != 1 {
            continue;
        }
        let pick = |rec: Recognised| AxisPick {
            index,
            rec,
            name: e.name.clone(),
        };
        if e.name.eq_ignore_ascii_case("x") {
            cands.push(('x', pick(coordinate_header(x_header, "x")?)));
        } else if e.name.eq_ignore_ascii_case("y") {
            cands.push(('y', pick(coordinate_header(y_header, "y")?)));
        } else if let Some(slot) = slot_of(&rec.role) {
            cands.push((slot, pick(rec)));
        }
    }
    let choose = |slot: char, what: &str| -> Result<Option<AxisPick>> {
        let all: Vec<&AxisPick> = cands
            .iter()
            .filter(|(s, _)| *s == slot)
            .map(|(_, p)| p)
            .collect();
        match all.as_slice() {
            [] => Ok(None),
            [one] => Ok(Some((*one).clone())),
            many => Err(Error::Columns {
                path: path.to_path_buf(),
                message: format!(
                    "several arrays could be the {what} axis: {}; map one explicitly",
                    many.iter()
                        .map(|p| format!("`{}`", p.name))
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
                found: entry_list(&entries),
                needed: "one 1D array per axis".into(),
            }),
        }
    };
    if x_pick.is_none() {
        x_pick = choose('x', "x (gate)")?;
    }
    if y_pick.is_none() {
        y_pick = choose('y', "y (field)")?;
    }
    // A bottom gate fills whichever slot is still empty (dual-gate maps).
    let bottom = choose('b', "bottom-gate")?;
    match (&x_pick, &y_pick, bottom) {
        (None, _, Some(b)) => x_pick = Some(b),
        (Some(_), None, Some(b)) => y_pick = Some(b),
        _ => {}
    }
    let needed_axes = "1D arrays named like vg, v_g, gate, vg_V or x for the x axis and b, field, \
                       b_T or y for the y axis (units from the name, e.g. b_mT), or a mapping \
                       such as gate=KEY,field=KEY";
    let (Some(xp), Some(yp)) = (x_pick, y_pick) else {
        return Err(Error::Columns {
            path: path.to_path_buf(),
            message: format!("the {kind} has no recognisable axis arrays for both x and y"),
            found: entry_list(&entries),
            needed: needed_axes.into(),
        });
    };
    if xp.index == yp.index {
        return Err(Error::Columns {
            path: path.to_path_buf(),
            message: format!("`{}` is used for both axes", xp.name),
            found: entry_list(&entries),
            needed: needed_axes.into(),
        });
    }
    for p in [&xp, &yp] {
        let e = &entries[p.index];
        if let Some(why) = &e.refused {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!("array `{}`: {why}", e.name),
            });
        }
        if e.shape.len() != 1 {
            return Err(Error::BadAxis {
                context: context.clone(),
                axis: e.name.clone(),
                message: format!(
                    "an axis needs a 1D array, this one has shape {}",
                    shape_text(&e.shape)
                ),
            });
        }
    }
    let x_raw = src.read(xp.index)?;
    let y_raw = src.read(yp.index)?;
    let (nx, ny) = (x_raw.len(), y_raw.len());
    let (x, rev_x) = build_axis(&context, &xp.name, &xp.rec, &x_raw)?;
    let (y, rev_y) = build_axis(&context, &yp.name, &yp.rec, &y_raw)?;

    // Channels: the mapped ones, else every 2D array of matching shape.
    let explicit = !mapped_channels.is_empty();
    let mut notes = Vec::new();
    let mut chosen: Vec<(usize, Recognised, String)> = mapped_channels;
    if !explicit {
        for (index, e) in entries.iter().enumerate() {
            if e.shape.len() != 2 || index == xp.index || index == yp.index {
                continue;
            }
            if !(e.shape == [ny, nx] || e.shape == [nx, ny]) {
                notes.push(format!(
                    "skipped `{}`: shape {} does not fit the axes ({ny}, {nx})",
                    e.name,
                    shape_text(&e.shape)
                ));
                continue;
            }
            if let Some(why) = &e.refused {
                notes.push(format!("skipped `{}`: {why}", e.name));
                continue;
            }
            let rec = columns::recognise(&e.name).map_err(|err| Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!("array `{}`: {err}", e.name),
            })?;
            if rec.role.is_coordinate() {
                notes.push(format!(
                    "skipped `{}`: a 2D coordinate array, not a measured channel",
                    e.name
                ));
                continue;
            }
            chosen.push((index, rec, e.name.clone()));
        }
    }
    if chosen.is_empty() {
        return Err(Error::Columns {
            path: path.to_path_buf(),
            message: format!("the {kind} has no 2D array of shape ({ny}, {nx}) or ({nx}, {ny}) to use as a channel"),
            found: entry_list(&entries),
            needed: "2D channel arrays such as rxx, rxy matching the axis lengths".into(),
        });
    }

    let mut map = Map::new(x, y);
    map.meta.columns = vec![
        (xp.rec.role.name(), xp.name.clone()),
        (yp.rec.role.name(), yp.name.clone()),
    ];
    for (index, rec, key) in chosen {
        let e = &entries[index];
        if let Some(why) = &e.refused {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!("array `{key}`: {why}"),
            });
        }
        let transposed = match e.shape.as_slice() {
            [a, b] if (*a, *b) == (ny, nx) => false,
            [a, b] if (*a, *b) == (nx, ny) => true,
            _ => {
                return Err(Error::BadAxis {
                    context: context.clone(),
                    axis: format!("{} / {}", xp.name, yp.name),
                    message: format!(
                        "channel `{key}` has shape {}, but the axes hold {nx} x values and {ny} \
                         y values; expected ({ny}, {nx}) or ({nx}, {ny})",
                        shape_text(&e.shape)
                    ),
                })
            }
        };
        let (a, b) = (e.shape[0], e.shape[1]);
        let values = src.read(index)?;
        let data = Array2::from_shape_vec((a, b), values).map_err(|err| Error::BadArrayFile {
            path: path.to_path_buf(),
            message: format!("array `{key}`: {err}"),
        })?;
        let data = if transposed {
            notes.push(format!(
                "`{key}` stored as (x, y); transposed to rows along y"
            ));
            data.reversed_axes().as_standard_layout().into_owned()
        } else {
            data
        };
        let mut data = orient(data, rev_x, rev_y);
        if rec.unit.to_si != 1.0 {
            data.mapv_inplace(|v| v * rec.unit.to_si);
        }
        let role_name = rec.role.name();
        let name = match rec.role {
            Role::Other(_) => key.clone(),
            _ if map.channel(&role_name).is_some() => key.clone(),
            _ => role_name.clone(),
        };
        map.add_channel(make_channel(&name, &rec, data))?;
        map.meta.columns.push((role_name, key));
    }
    if nx == ny {
        notes.push("square arrays taken as rows along y (NumPy row-major convention)".into());
    }
    map.meta.notes.push(format!(
        "{kind}: x axis `{}` ({nx}), y axis `{}` ({ny}), {} channel(s)",
        xp.name,
        yp.name,
        map.channels().len()
    ));
    map.meta.notes.extend(notes);
    push_reversal_notes(&mut map, &xp.name, rev_x, &yp.name, rev_y);
    map.meta.temperature_k = temperature;
    Ok(map)
}

// ---------------------------------------------------------------------------------------------
// .npz

/// An open `.npz` archive as a source of named arrays.
struct NpzSource<'a> {
    path: &'a Path,
    archive: zip::ZipArchive<std::io::BufReader<std::fs::File>>,
    /// Zip index of each entry.
    zip_index: Vec<usize>,
    entries: Vec<ArrayEntry>,
    sizes: Vec<u64>,
    progress: &'a dyn Progress,
    done: u64,
}

impl ArraySource for NpzSource<'_> {
    fn entries(&self) -> &[ArrayEntry] {
        &self.entries
    }
    fn read(&mut self, index: usize) -> Result<Vec<f64>> {
        let path = self.path;
        let what = format!("array `{}`: ", self.entries[index].name);
        let mut f = self
            .archive
            .by_index(self.zip_index[index])
            .map_err(|e| zip_error(path, &e))?;
        let size = self.sizes[index];
        // The header was checked when the archive was opened; read past it again.
        let h = read_header(path, &what, &mut f, size)?;
        let v = read_body(path, &what, &mut f, &h, size, self.progress, self.done)?;
        self.done += size;
        Ok(v)
    }
}

fn zip_error(path: &Path, e: &zip::result::ZipError) -> Error {
    Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("not a readable .npz (zip) archive: {e}"),
    }
}

/// Load a `.npz` archive of named arrays (uncompressed, as `np.savez` writes) into a [`Map`].
pub fn load_npz(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<Map> {
    let (file, file_len) = super::open_nonempty(path)?;
    let mut archive =
        zip::ZipArchive::new(std::io::BufReader::new(file)).map_err(|e| zip_error(path, &e))?;
    let mut entries = Vec::new();
    let mut zip_index = Vec::new();
    let mut sizes = Vec::new();
    for i in 0..archive.len() {
        let mut f = archive.by_index(i).map_err(|e| zip_error(path, &e))?;
        if f.is_dir() {
            continue;
        }
        let full = f.name().to_string();
        let name = full.strip_suffix(".npy").unwrap_or(&full).to_string();
        let what = format!("array `{name}`: ");
        if f.compression() != zip::CompressionMethod::Stored {
            return Err(Error::UnsupportedFormat {
                path: path.to_path_buf(),
                message: format!(
                    "{what}compressed archives (np.savez_compressed) are not supported; save \
                     with np.savez, or as .npy files"
                ),
            });
        }
        let size = f.size();
        if size > file_len {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!(
                    "{what}the archive claims {size} bytes for it, more than the whole file \
                     ({file_len} bytes)"
                ),
            });
        }
        let h = read_header(path, &what, &mut f, size)?;
        entries.push(ArrayEntry {
            name,
            shape: h.shape.clone(),
            refused: h.dtype.clone().err(),
        });
        zip_index.push(i);
        sizes.push(size);
    }
    if entries.is_empty() {
        return Err(Error::EmptyFile {
            path: path.to_path_buf(),
        });
    }
    progress.start("reading .npz", file_len);
    let mut src = NpzSource {
        path,
        archive,
        zip_index,
        entries,
        sizes,
        progress,
        done: 0,
    };
    let map = assemble(path, ".npz archive", &mut src, opts);
    progress.finish();
    map
}

#[cfg(test)]
pub(crate) mod tests {
    use super::*;
    use crate::progress::NoProgress;
    use std::sync::atomic::{AtomicUsize, Ordering};

    static COUNTER: AtomicUsize = AtomicUsize::new(0);

    pub(crate) fn scratch() -> PathBuf {
        let d = std::env::temp_dir().join(format!(
            "fanmark-npy-{}-{}",
            std::process::id(),
            COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    /// Bytes of a version-1 `.npy` with the given header fields and raw body.
    pub(crate) fn npy_bytes(descr: &str, fortran: bool, shape: &[usize], body: &[u8]) -> Vec<u8> {
        let shape = shape_text(shape);
        let mut dict = format!(
            "{{'descr': '{descr}', 'fortran_order': {}, 'shape': {shape}, }}",
            if fortran { "True" } else { "False" }
        );
        while (10 + dict.len() + 1) % 64 != 0 {
            dict.push(' ');
        }
        dict.push('\n');
        let mut out = NPY_MAGIC.to_vec();
        out.extend([1u8, 0u8]);
        out.extend((dict.len() as u16).to_le_bytes());
        out.extend(dict.as_bytes());
        out.extend(body);
        out
    }

    pub(crate) fn f64_body(v: &[f64]) -> Vec<u8> {
        v.iter().flat_map(|x| x.to_le_bytes()).collect()
    }

    #[test]
    fn header_dict_is_parsed() {
        let (d, f, s) =
            parse_header_dict(b"{'descr': '<f8', 'fortran_order': False, 'shape': (3, 4), }")
                .unwrap();
        assert_eq!((d.as_str(), f, s), ("<f8", false, vec![3, 4]));
        let (_, f, s) =
            parse_header_dict(b"{\"shape\": (7,), \"fortran_order\": True, \"descr\": \">i4\"}")
                .unwrap();
        assert_eq!((f, s), (true, vec![7]));
        let e =
            parse_header_dict(b"{'descr': [('a', '<f8')], 'fortran_order': False, 'shape': (2,)}")
                .unwrap_err();
        assert!(e.contains("structured"), "{e}");
        assert!(parse_header_dict(b"{'descr': '<f8', 'shape': (2,)}").is_err());
    }

    #[test]
    fn dtypes_accepted_and_refused() {
        assert_eq!(Dtype::parse("<f8").unwrap().name(), "float64");
        assert_eq!(Dtype::parse(">i4").unwrap().name(), "int32");
        for (d, word) in [
            ("<c16", "complex128"),
            ("|b1", "bool"),
            ("<U5", "unicode"),
            ("|O", "objects"),
            ("<f2", "float16"),
            ("|u1", "uint8"),
        ] {
            let e = Dtype::parse(d).unwrap_err();
            assert!(e.contains(d) && e.contains(word), "{d}: {e}");
        }
        // Big-endian conversion of 1.5 (0x3FF8000000000000) and of i32 -7.
        let mut out = Vec::new();
        Dtype::parse(">f8")
            .unwrap()
            .convert(&[0x3F, 0xF8, 0, 0, 0, 0, 0, 0], &mut out);
        Dtype::parse("<i4")
            .unwrap()
            .convert(&(-7i32).to_le_bytes(), &mut out);
        Dtype::parse("<f4")
            .unwrap()
            .convert(&0.25f32.to_le_bytes(), &mut out);
        assert_eq!(out, vec![1.5, -7.0, 0.25]);
    }

    #[test]
    fn huge_claimed_shape_is_refused_before_allocation() {
        let bytes = npy_bytes("<f8", false, &[1 << 30, 1 << 30], &f64_body(&[1.0; 4]));
        let p = Path::new("big.npy");
        let mut r = bytes.as_slice();
        let h = read_header(p, "", &mut r, bytes.len() as u64).unwrap();
        let e = read_body(p, "", &mut r, &h, bytes.len() as u64, &NoProgress, 0)
            .unwrap_err()
            .to_string();
        assert!(e.contains("big.npy") && e.contains("truncated"), "{e}");
        assert!(e.contains("32 bytes are present"), "{e}");
        // A shape whose byte count overflows.
        let bytes = npy_bytes("<f8", false, &[usize::MAX / 2, 3], &[]);
        let mut r = bytes.as_slice();
        let h = read_header(p, "", &mut r, bytes.len() as u64).unwrap();
        let e = read_body(p, "", &mut r, &h, bytes.len() as u64, &NoProgress, 0)
            .unwrap_err()
            .to_string();
        assert!(e.contains("impossibly large"), "{e}");
    }

    #[test]
    fn fortran_order_is_reordered() {
        // Column-major storage of [[1, 2, 3], [4, 5, 6]].
        let bytes = npy_bytes(
            "<f8",
            true,
            &[2, 3],
            &f64_body(&[1.0, 4.0, 2.0, 5.0, 3.0, 6.0]),
        );
        let mut r = bytes.as_slice();
        let p = Path::new("f.npy");
        let h = read_header(p, "", &mut r, bytes.len() as u64).unwrap();
        let v = read_body(p, "", &mut r, &h, bytes.len() as u64, &NoProgress, 0).unwrap();
        assert_eq!(v, vec![1.0, 2.0, 3.0, 4.0, 5.0, 6.0]);
    }

    #[test]
    fn version_2_header_and_bad_magic() {
        let mut bytes = npy_bytes("<f8", false, &[2], &f64_body(&[1.0, 2.0]));
        // Rewrite as version 2: 4-byte header length.
        let hl = u16::from_le_bytes([bytes[8], bytes[9]]) as u32;
        let mut v2 = NPY_MAGIC.to_vec();
        v2.extend([2u8, 0u8]);
        v2.extend(hl.to_le_bytes());
        v2.extend(&bytes[10..]);
        let v = axis_from_npy_bytes(Path::new("v2.npy"), &v2).unwrap();
        assert_eq!(v, vec![1.0, 2.0]);
        bytes[1] = b'X';
        let e = axis_from_npy_bytes(Path::new("bad.npy"), &bytes)
            .unwrap_err()
            .to_string();
        assert!(e.contains("bad.npy") && e.contains("magic"), "{e}");
    }

    #[test]
    fn npy_with_sibling_axes_and_transposed_storage() {
        let d = scratch();
        // Map of 2 field rows × 3 gate columns, stored as (x, y) = (3, 2).
        let x = [-1.0, 0.0, 1.0];
        let y = [2.0, 1.0]; // decreasing: rows get reversed
                            // data[row y_i][col x_j] = 10 * i + j, stored transposed: element (j, i).
        let mut body = Vec::new();
        for j in 0..3 {
            for i in 0..2 {
                body.push(10.0 * i as f64 + j as f64);
            }
        }
        std::fs::write(
            d.join("m.npy"),
            npy_bytes("<f8", false, &[3, 2], &f64_body(&body)),
        )
        .unwrap();
        std::fs::write(
            d.join("m.x.npy"),
            npy_bytes("<f8", false, &[3], &f64_body(&x)),
        )
        .unwrap();
        std::fs::write(
            d.join("m.y.npy"),
            npy_bytes("<f8", false, &[2], &f64_body(&y)),
        )
        .unwrap();
        let m = load_npy(&d.join("m.npy"), &LoadOptions::default(), &NoProgress).unwrap();
        assert_eq!(m.x().values(), &x);
        assert_eq!(m.y().values(), &[1.0, 2.0]);
        let c = m.channel("rxx").unwrap();
        // y = 1 T was file row i = 1.
        assert_eq!(c.data[[0, 0]], 10.0);
        assert_eq!(c.data[[0, 2]], 12.0);
        assert_eq!(c.data[[1, 1]], 1.0);
    }

    #[test]
    fn npy_without_axes_is_refused_with_advice() {
        let d = scratch();
        let p = d.join("lone.npy");
        std::fs::write(&p, npy_bytes("<f8", false, &[2, 2], &f64_body(&[1.0; 4]))).unwrap();
        let e = load_npy(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(e.contains("lone.npy") && e.contains("lone.x.npy"), "{e}");
    }

    #[test]
    fn npy_refuses_wrong_dtype_and_truncation() {
        let d = scratch();
        std::fs::write(
            d.join("c.x.npy"),
            npy_bytes("<f8", false, &[2], &f64_body(&[0.0, 1.0])),
        )
        .unwrap();
        std::fs::write(
            d.join("c.y.npy"),
            npy_bytes("<f8", false, &[2], &f64_body(&[0.0, 1.0])),
        )
        .unwrap();
        let p = d.join("c.npy");
        std::fs::write(&p, npy_bytes("<c16", false, &[2, 2], &[0u8; 64])).unwrap();
        let e = load_npy(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(e.contains("c.npy") && e.contains("complex128"), "{e}");
        std::fs::write(&p, npy_bytes("<f8", false, &[2, 2], &f64_body(&[1.0; 3]))).unwrap();
        let e = load_npy(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("c.npy") && e.contains("32 bytes") && e.contains("24 bytes"),
            "{e}"
        );
    }

    fn write_npz(path: &Path, add: impl FnOnce(&mut ndarray_npy::NpzWriter<std::fs::File>)) {
        let mut w = ndarray_npy::NpzWriter::new(std::fs::File::create(path).unwrap());
        add(&mut w);
        w.finish().unwrap();
    }

    #[test]
    fn npz_by_key_names_with_units_orientation_and_dtypes() {
        let d = scratch();
        let p = d.join("fan.npz");
        let vg = ndarray::arr1(&[1.0, 0.0, -1.0]); // decreasing: columns reversed
        let b = ndarray::arr1(&[0.0, 500.0]); // mT
                                              // rxx[i][j] = 100 i + j over (b_i, vg_j) as stored.
        let rxx = Array2::from_shape_fn((2, 3), |(i, j)| 100.0 * i as f64 + j as f64);
        // rxy in kΩ, stored (x, y) and as float32.
        let rxy = Array2::from_shape_fn((3, 2), |(j, i)| (10 * i + j) as f32);
        let count = Array2::from_shape_fn((2, 3), |(i, j)| (i * 3 + j) as i64);
        let mask = Array2::from_elem((2, 3), true);
        let odd = Array2::<f64>::zeros((4, 4));
        write_npz(&p, |w| {
            w.add_array("vg", &vg).unwrap();
            w.add_array("b_mT", &b).unwrap();
            w.add_array("rxx", &rxx).unwrap();
            w.add_array("rxy_kohm", &rxy).unwrap();
            w.add_array("counts", &count).unwrap();
            w.add_array("mask", &mask).unwrap();
            w.add_array("odd", &odd).unwrap();
            w.add_array("T_mK", &ndarray::arr0(250.0)).unwrap();
        });
        let m = load_npz(&p, &LoadOptions::default(), &NoProgress).unwrap();
        assert_eq!(m.x().values(), &[-1.0, 0.0, 1.0]);
        assert_eq!(m.y().values(), &[0.0, 0.5]);
        let rxx = &m.channel("rxx").unwrap().data;
        // Map column 0 is V_g = -1, file column 2.
        assert_eq!(rxx[[1, 0]], 102.0);
        assert_eq!(rxx[[0, 2]], 0.0);
        let rxy = &m.channel("rxy").unwrap().data;
        // File element (j = 2, i = 1) = 12 kΩ sits at map (row 1, column 0).
        assert_eq!(rxy[[1, 0]], 12_000.0);
        assert_eq!(rxy[[0, 2]], 0.0);
        let counts = &m.channel("counts").unwrap().data;
        assert_eq!(counts[[1, 0]], 5.0);
        assert!(m.channel("mask").is_none() && m.channel("odd").is_none());
        assert!(m
            .meta
            .notes
            .iter()
            .any(|n| n.contains("mask") && n.contains("bool")));
        assert!(m
            .meta
            .notes
            .iter()
            .any(|n| n.contains("odd") && n.contains("(4, 4)")));
        assert_eq!(m.meta.temperature_k, Some(0.25));
    }

    #[test]
    fn npz_explicit_mapping_and_generic_xy_keys() {
        let d = scratch();
        let p = d.join("m.npz");
        let data = Array2::from_shape_fn((2, 2), |(i, j)| (i * 2 + j) as f64);
        write_npz(&p, |w| {
            w.add_array("V1", &ndarray::arr1(&[0.0, 2.0])).unwrap();
            w.add_array("B_magnet", &ndarray::arr1(&[1.0, 3.0]))
                .unwrap();
            w.add_array("R_4pt", &data).unwrap();
            w.add_array("R_2pt", &data).unwrap();
        });
        let opts = LoadOptions {
            columns: columns::parse_mapping("gate=V1,field=B_magnet,rxx=R_4pt").unwrap(),
            ..LoadOptions::default()
        };
        let m = load_npz(&p, &opts, &NoProgress).unwrap();
        assert_eq!(m.channels().len(), 1);
        assert_eq!(m.channel("rxx").unwrap().data[[1, 0]], 2.0);
        assert_eq!(m.y().values(), &[1.0, 3.0]);
        assert!(m.meta.notes.iter().any(|n| n.contains("square")));
        // Without the mapping the axes are not found; the error lists what is there.
        let e = load_npz(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("m.npz") && e.contains("V1 (2,)") && e.contains("R_4pt (2, 2)"),
            "{e}"
        );
        let e = load_npz(
            &p,
            &LoadOptions {
                columns: columns::parse_mapping("gate=V9").unwrap(),
                ..LoadOptions::default()
            },
            &NoProgress,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("V9"), "{e}");

        let q = d.join("xy.npz");
        write_npz(&q, |w| {
            w.add_array("x", &ndarray::arr1(&[0.0, 10.0, 20.0]))
                .unwrap();
            w.add_array("y", &ndarray::arr1(&[1.0, 2.0])).unwrap();
            w.add_array("sxx", &Array2::<f64>::ones((2, 3))).unwrap();
        });
        let opts = LoadOptions {
            matrix: crate::io::MatrixOptions {
                x_header: Some("vg_mV".into()),
                ..Default::default()
            },
            ..LoadOptions::default()
        };
        let m = load_npz(&q, &opts, &NoProgress).unwrap();
        assert_eq!(m.x().values(), &[0.0, 0.01, 0.02]);
        assert_eq!(m.channel("sxx").unwrap().unit, "S");
    }

    #[test]
    fn npz_ambiguous_axes_and_bad_axis() {
        let d = scratch();
        let p = d.join("two.npz");
        write_npz(&p, |w| {
            w.add_array("vg", &ndarray::arr1(&[0.0, 1.0])).unwrap();
            w.add_array("gate", &ndarray::arr1(&[0.0, 1.0])).unwrap();
            w.add_array("b", &ndarray::arr1(&[0.0, 1.0])).unwrap();
            w.add_array("rxx", &Array2::<f64>::ones((2, 2))).unwrap();
        });
        let e = load_npz(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("two.npz") && e.contains("`vg`") && e.contains("`gate`"),
            "{e}"
        );

        let p = d.join("flat.npz");
        write_npz(&p, |w| {
            w.add_array("vg", &ndarray::arr1(&[0.0, 1.0, 2.0])).unwrap();
            w.add_array("b", &ndarray::arr1(&[1.0, 1.0])).unwrap();
            w.add_array("rxx", &Array2::<f64>::ones((2, 3))).unwrap();
        });
        let e = load_npz(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("flat.npz") && e.contains("`b`") && e.contains("constant"),
            "{e}"
        );
    }

    #[test]
    fn npz_compressed_and_garbage_are_refused() {
        let d = scratch();
        let p = d.join("junk.npz");
        std::fs::write(&p, b"this is not a zip archive at all").unwrap();
        let e = load_npz(&p, &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(e.contains("junk.npz") && e.contains("zip"), "{e}");
        let p = d.join("empty.npz");
        std::fs::write(&p, b"").unwrap();
        let e = load_npz(&p, &LoadOptions::default(), &NoProgress).unwrap_err();
        assert!(matches!(e, Error::EmptyFile { .. }), "{e}");
    }
}

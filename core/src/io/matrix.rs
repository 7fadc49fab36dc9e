//! Plain matrix text: one channel's 2D matrix, rows along `y` (default: field B) and columns
//! along `x` (default: gate voltage V_g), with the axis vectors either as the first row and the
//! first column of the file or in separate files.
//!
//! Layout with both axes inside the file (the top-left cell is ignored and may be left out):
//!
//! ```text
//! # device D7, 1.6 K
//! b\vg   -1.0   0.0   1.0
//! 0.0     10    11    12
//! 0.5     13    14    nan
//! ```
//!
//! The delimiter (whitespace, comma, tab or semicolon) is detected from the first data line; `#`
//! lines and blank lines are skipped; a UTF-8 BOM and Windows line ends are accepted; `nan` cells,
//! and empty cells in delimited files, are missing points. A decreasing axis is reversed together
//! with the data so the map's axes increase; a constant or non-monotonic axis is an error.
//!
//! The helpers for axes and orientation here are shared by the array loaders.

use super::columns::{self, Recognised, Role};
use super::LoadOptions;
use crate::error::{Error, Result};
use crate::map::{Axis, Channel, ChannelKind, Map, Quantity};
use crate::progress::Progress;
use ndarray::{s, Array2};
use std::path::Path;

/// Header assumed for the column axis when none is given: gate voltage in volts.
pub const DEFAULT_X_HEADER: &str = "vg_V";
/// Header assumed for the row axis when none is given: field in tesla.
pub const DEFAULT_Y_HEADER: &str = "b_T";
/// Header assumed for the single channel when none is given: R_xx in ohms.
pub const DEFAULT_CHANNEL_HEADER: &str = "rxx_ohm";

/// Progress is reported about every this many bytes of text.
const PROGRESS_STEP: usize = 1 << 20;

/// Load a plain matrix text file into a one-channel [`Map`] in SI units.
///
/// The axes come from the first row/column unless `opts.matrix.x_axis_file` /
/// `y_axis_file` give them; their roles and units come from `opts.matrix.x_header`,
/// `y_header` and `channel_header` (defaults `vg_V`, `b_T`, `rxx_ohm`).
pub fn load(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<Map> {
    let m = &opts.matrix;
    let h = MatrixHeaders::of(m)?;
    let (x_header, y_header) = (h.x, h.y);

    let x_file = match &m.x_axis_file {
        Some(p) => Some((p.as_path(), read_axis_file(p)?)),
        None => None,
    };
    let y_file = match &m.y_axis_file {
        Some(p) => Some((p.as_path(), read_axis_file(p)?)),
        None => None,
    };

    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    let text = decode_text(path, &bytes)?;
    progress.start("reading matrix text", bytes.len() as u64);
    let parsed = parse_matrix(path, text, x_file.is_none(), y_file.is_none(), progress);
    progress.finish();
    let parsed = parsed?;

    let context = path.display().to_string();
    let (nrows, ncols) = parsed.data.dim();
    let x_raw = match (&x_file, parsed.x_axis) {
        (Some((p, v)), _) => {
            check_axis_length(&context, x_header, p, v.len(), ncols, "columns")?;
            v.clone()
        }
        (None, Some(v)) => v,
        (None, None) => unreachable_axis(&context, x_header)?,
    };
    let y_raw = match (&y_file, parsed.y_axis) {
        (Some((p, v)), _) => {
            check_axis_length(&context, y_header, p, v.len(), nrows, "rows")?;
            v.clone()
        }
        (None, Some(v)) => v,
        (None, None) => unreachable_axis(&context, y_header)?,
    };
    let x_context = x_file
        .as_ref()
        .map_or(context.clone(), |(p, _)| p.display().to_string());
    let y_context = y_file
        .as_ref()
        .map_or(context.clone(), |(p, _)| p.display().to_string());
    let map = h.map(
        (&x_context, &x_raw),
        (&y_context, &y_raw),
        parsed.data,
        |map| {
            map.meta.notes.push(format!(
        "matrix text: {nrows} rows along `{y_header}`, {ncols} columns along `{x_header}`, \
         delimiter {}",
                parsed.delimiter.describe()
            ))
        },
    )?;
    Ok(map)
}

/// The header texts of a one-channel matrix (from the options or the defaults) and the roles
/// and units they name.
pub(crate) struct MatrixHeaders<'a> {
    /// Header of the x axis (columns), e.g. `vg_V`.
    pub x: &'a str,
    /// Header of the y axis (rows), e.g. `b_T`.
    pub y: &'a str,
    /// Header of the channel, e.g. `rxx_ohm`.
    pub channel: &'a str,
    x_rec: Recognised,
    y_rec: Recognised,
    ch_rec: Recognised,
}

impl<'a> MatrixHeaders<'a> {
    /// Recognise the headers given in `m`, or the defaults.
    pub fn of(m: &'a super::MatrixOptions) -> Result<MatrixHeaders<'a>> {
        let x = m.x_header.as_deref().unwrap_or(DEFAULT_X_HEADER);
        let y = m.y_header.as_deref().unwrap_or(DEFAULT_Y_HEADER);
        let channel = m
            .channel_header
            .as_deref()
            .unwrap_or(DEFAULT_CHANNEL_HEADER);
        Ok(MatrixHeaders {
            x,
            y,
            channel,
            x_rec: coordinate_header(x, "x")?,
            y_rec: coordinate_header(y, "y")?,
            ch_rec: channel_header(channel)?,
        })
    }

    /// The one-channel map from raw axis values (each with the context its errors name) and
    /// data of shape (y, x) in the header's units: axes made increasing (data flipped to
    /// match), values converted to SI, columns recorded. `describe` adds the format's note
    /// before the notes on reversed axes.
    pub fn map(
        &self,
        (x_context, x_raw): (&str, &[f64]),
        (y_context, y_raw): (&str, &[f64]),
        data: Array2<f64>,
        describe: impl FnOnce(&mut Map),
    ) -> Result<Map> {
        let (x, rev_x) = build_axis(x_context, self.x, &self.x_rec, x_raw)?;
        let (y, rev_y) = build_axis(y_context, self.y, &self.y_rec, y_raw)?;
        let mut data = orient(data, rev_x, rev_y);
        if self.ch_rec.unit.to_si != 1.0 {
            data.mapv_inplace(|v| v * self.ch_rec.unit.to_si);
        }
        let mut map = Map::new(x, y);
        map.add_channel(make_channel(&self.ch_rec.role.name(), &self.ch_rec, data))?;
        map.meta.columns = vec![
            (self.x_rec.role.name(), self.x.to_string()),
            (self.y_rec.role.name(), self.y.to_string()),
            (self.ch_rec.role.name(), self.channel.to_string()),
        ];
        describe(&mut map);
        push_reversal_notes(&mut map, self.x, rev_x, self.y, rev_y);
        Ok(map)
    }
}

/// The parser always yields an inline axis where no file gives one; this keeps that promise
/// an error rather than a panic should it ever break.
fn unreachable_axis(context: &str, header: &str) -> Result<Vec<f64>> {
    Err(Error::BadAxis {
        context: context.to_string(),
        axis: header.to_string(),
        message: "no values were found for this axis".into(),
    })
}

/// Notes saying which axes were reversed on the way in.
pub(crate) fn push_reversal_notes(map: &mut Map, x: &str, rev_x: bool, y: &str, rev_y: bool) {
    if rev_x {
        map.meta.notes.push(format!(
            "x axis `{x}` decreases in the file; columns reversed so it increases"
        ));
    }
    if rev_y {
        map.meta.notes.push(format!(
            "y axis `{y}` decreases in the file; rows reversed so it increases"
        ));
    }
}

/// Recognise an axis header; it must name a coordinate (gate, field, density…) or an unknown
/// quantity, not a data channel such as `rxx`.
pub(crate) fn coordinate_header(header: &str, which: &str) -> Result<Recognised> {
    let rec = columns::recognise(header)?;
    if rec.role.is_coordinate() || matches!(rec.role, Role::Other(_)) {
        Ok(rec)
    } else {
        Err(Error::invalid(
            format!("{which} axis header `{header}`"),
            format!(
                "`{}` is a data channel, an axis needs a coordinate such as vg_V, b_T or n_cm2",
                rec.role.name()
            ),
        ))
    }
}

/// Recognise a channel header; it must not name a coordinate.
pub(crate) fn channel_header(header: &str) -> Result<Recognised> {
    let rec = columns::recognise(header)?;
    if rec.role.is_coordinate() {
        Err(Error::invalid(
            format!("channel header `{header}`"),
            format!(
                "`{}` is a coordinate, the channel needs a measured quantity such as rxx_ohm, \
                 rxy_kohm or sxx_S",
                rec.role.name()
            ),
        ))
    } else {
        Ok(rec)
    }
}

/// A channel from a recognised header and data already in SI.
pub(crate) fn make_channel(name: &str, rec: &Recognised, data: Array2<f64>) -> Channel {
    let kind = rec.role.channel_kind();
    let ch = Channel::new(name, kind, data);
    if kind == ChannelKind::Other {
        ch.with_unit(rec.unit.dimension.si_symbol())
    } else {
        ch
    }
}

/// Error unless an axis vector's length matches the matrix dimension it labels.
fn check_axis_length(
    context: &str,
    header: &str,
    file: &Path,
    found: usize,
    expected: usize,
    what: &str,
) -> Result<()> {
    if found == expected {
        return Ok(());
    }
    Err(Error::BadAxis {
        context: context.to_string(),
        axis: header.to_string(),
        message: format!(
            "the axis file {} holds {found} values, but the matrix has {expected} {what}",
            file.display()
        ),
    })
}

/// Turn axis values as read (file order, file units) into a strictly increasing SI [`Axis`].
/// Returns the axis and whether the file order was decreasing (so the data must be reversed
/// along it). Errors name `context` (the file) and the axis for: no values, a non-finite
/// value, a constant axis, a repeated value, or a non-monotonic axis.
pub(crate) fn build_axis(
    context: &str,
    name: &str,
    rec: &Recognised,
    raw: &[f64],
) -> Result<(Axis, bool)> {
    let bad = |message: String| Error::BadAxis {
        context: context.to_string(),
        axis: name.to_string(),
        message,
    };
    if raw.is_empty() {
        return Err(bad("the axis has no values".into()));
    }
    if let Some(i) = raw.iter().position(|v| !v.is_finite()) {
        return Err(bad(format!(
            "value {} (point {} of {}) is not a finite number",
            raw[i],
            i + 1,
            raw.len()
        )));
    }
    let mut values: Vec<f64> = raw.iter().map(|v| v * rec.unit.to_si).collect();
    let mut reversed = false;
    if raw.len() >= 2 {
        if raw.iter().all(|&v| v == raw[0]) {
            return Err(bad(format!(
                "the axis is constant (all {} values are {}); it must change from point to point",
                raw.len(),
                raw[0]
            )));
        }
        let increasing = raw[1] > raw[0];
        let ok = |a: f64, b: f64| if increasing { b > a } else { b < a };
        if let Some(i) = raw.windows(2).position(|w| !ok(w[0], w[1])) {
            let (a, b) = (raw[i], raw[i + 1]);
            return Err(bad(if a == b {
                format!(
                    "value {a} repeats at points {} and {}; an axis must be strictly monotonic",
                    i + 1,
                    i + 2
                )
            } else {
                format!(
                    "the axis is not monotonic: it {} from the start, then goes from {a} to {b} \
                     at point {} of {}",
                    if increasing { "increases" } else { "decreases" },
                    i + 2,
                    raw.len()
                )
            }));
        }
        if !increasing {
            values.reverse();
            reversed = true;
        }
    }
    let quantity = rec.role.quantity().unwrap_or(Quantity::Other);
    let axis = Axis::new(name, quantity, values).map_err(|e| match e {
        Error::BadAxis { axis, message, .. } => Error::BadAxis {
            context: context.to_string(),
            axis,
            message,
        },
        other => other,
    })?;
    Ok((
        if quantity == Quantity::Other {
            axis.with_unit(rec.unit.dimension.si_symbol())
        } else {
            axis
        },
        reversed,
    ))
}

/// Reverse a (rows = y, columns = x) matrix along the axes that were reversed.
pub(crate) fn orient(data: Array2<f64>, rev_x: bool, rev_y: bool) -> Array2<f64> {
    match (rev_x, rev_y) {
        (false, false) => data,
        (true, false) => data.slice(s![.., ..;-1]).to_owned(),
        (false, true) => data.slice(s![..;-1, ..]).to_owned(),
        (true, true) => data.slice(s![..;-1, ..;-1]).to_owned(),
    }
}

/// Text of a file: UTF-8 with an optional BOM removed.
fn decode_text<'a>(path: &Path, bytes: &'a [u8]) -> Result<&'a str> {
    let bytes = bytes.strip_prefix(b"\xEF\xBB\xBF").unwrap_or(bytes);
    std::str::from_utf8(bytes).map_err(|e| Error::UnsupportedFormat {
        path: path.to_path_buf(),
        message: format!(
            "not UTF-8 text (invalid byte at offset {}); a matrix file must be plain text",
            e.valid_up_to()
        ),
    })
}

/// How the cells of a line are separated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Delimiter {
    Whitespace,
    Comma,
    Tab,
    Semicolon,
}

impl Delimiter {
    /// Guess from a data line: semicolon, then tab, then comma, else whitespace.
    fn detect(line: &str) -> Delimiter {
        if line.contains(';') {
            Delimiter::Semicolon
        } else if line.contains('\t') {
            Delimiter::Tab
        } else if line.contains(',') {
            Delimiter::Comma
        } else {
            Delimiter::Whitespace
        }
    }
    fn describe(self) -> &'static str {
        match self {
            Delimiter::Whitespace => "whitespace",
            Delimiter::Comma => "comma",
            Delimiter::Tab => "tab",
            Delimiter::Semicolon => "semicolon",
        }
    }
    /// Split a line into trimmed cells; a single trailing delimiter is ignored.
    fn split<'a>(self, line: &'a str, out: &mut Vec<&'a str>) {
        out.clear();
        let c = match self {
            Delimiter::Whitespace => {
                out.extend(line.split_whitespace());
                return;
            }
            Delimiter::Comma => ',',
            Delimiter::Tab => '\t',
            Delimiter::Semicolon => ';',
        };
        out.extend(line.split(c).map(str::trim));
        if out.len() > 1 && out.last().is_some_and(|s| s.is_empty()) {
            out.pop();
        }
    }
}

/// The lines of a text that hold data: 1-based line number, byte offset of the line's end,
/// and the line without its line end. Blank lines and `#` comments are skipped.
fn data_lines(text: &str) -> impl Iterator<Item = (usize, usize, &str)> {
    let mut offset = 0usize;
    text.split('\n').enumerate().filter_map(move |(i, raw)| {
        offset += raw.len() + 1;
        let line = raw.strip_suffix('\r').unwrap_or(raw);
        let t = line.trim();
        if t.is_empty() || t.starts_with('#') {
            None
        } else {
            Some((i + 1, offset, line))
        }
    })
}

/// One cell as a number: `nan` (any case, optionally signed) and an empty cell are missing
/// points (NaN); infinities and anything else that is not a finite number are refused.
fn parse_cell(s: &str) -> Option<f64> {
    if s.is_empty() {
        return Some(f64::NAN);
    }
    let unsigned = s.strip_prefix(['+', '-']).unwrap_or(s);
    if unsigned.eq_ignore_ascii_case("nan") {
        return Some(f64::NAN);
    }
    fast_float2::parse::<f64, _>(s)
        .ok()
        .filter(|v| v.is_finite())
}

fn not_a_number(path: &Path, line: usize, column: usize, text: &str) -> Error {
    Error::NotANumber {
        path: path.to_path_buf(),
        line,
        column: column.to_string(),
        text: text.to_string(),
    }
}

/// What a matrix text holds: the data (rows, columns) and the inline axes, if any.
struct ParsedMatrix {
    data: Array2<f64>,
    x_axis: Option<Vec<f64>>,
    y_axis: Option<Vec<f64>>,
    delimiter: Delimiter,
}

/// Parse the matrix. `x_inline`: the first data line is the x axis; `y_inline`: the first
/// cell of each further line is the y value.
fn parse_matrix(
    path: &Path,
    text: &str,
    x_inline: bool,
    y_inline: bool,
    progress: &dyn Progress,
) -> Result<ParsedMatrix> {
    let mut lines = data_lines(text).peekable();
    let Some(&(_, _, first)) = lines.peek() else {
        return Err(Error::EmptyFile {
            path: path.to_path_buf(),
        });
    };
    let delimiter = Delimiter::detect(first);
    let mut cells: Vec<&str> = Vec::new();

    // The x-axis row, kept as text until the data rows say whether it has a corner cell.
    let axis_row: Option<(usize, Vec<String>)> = if x_inline {
        let (line_no, _, line) = lines.next().expect("peeked");
        delimiter.split(line, &mut cells);
        Some((line_no, cells.iter().map(|s| s.to_string()).collect()))
    } else {
        None
    };

    let skip = usize::from(y_inline);
    let mut values: Vec<f64> = Vec::new();
    let mut y_axis: Vec<f64> = Vec::new();
    let mut width: Option<(usize, usize)> = None; // (cells per row, line of the first row)
    let mut nrows = 0usize;
    let mut next_report = PROGRESS_STEP;
    for (line_no, end, line) in lines {
        delimiter.split(line, &mut cells);
        match width {
            None => width = Some((cells.len(), line_no)),
            Some((w, first_line)) if w != cells.len() => {
                return Err(Error::RaggedRow {
                    path: path.to_path_buf(),
                    line: line_no,
                    first_line,
                    expected: w,
                    found: cells.len(),
                })
            }
            Some(_) => {}
        }
        if cells.len() <= skip {
            return Err(Error::BadArrayFile {
                path: path.to_path_buf(),
                message: format!(
                    "line {line_no}: the row holds only its y-axis value and no data cells"
                ),
            });
        }
        for (j, cell) in cells.iter().enumerate() {
            let v = parse_cell(cell).ok_or_else(|| not_a_number(path, line_no, j + 1, cell))?;
            if j < skip {
                y_axis.push(v);
            } else {
                values.push(v);
            }
        }
        nrows += 1;
        if end >= next_report {
            progress.set(end as u64);
            next_report = end + PROGRESS_STEP;
        }
    }
    progress.set(text.len() as u64);

    let Some((w, _)) = width else {
        return Err(match axis_row {
            Some(_) => Error::HeaderOnly {
                path: path.to_path_buf(),
            },
            None => Error::EmptyFile {
                path: path.to_path_buf(),
            },
        });
    };
    let ncols = w - skip;

    let x_axis = match axis_row {
        None => None,
        Some((line_no, row)) => {
            // With a y column the axis row may carry a corner cell (ignored) or leave it out.
            let start = if y_inline && row.len() == ncols + 1 {
                1
            } else if row.len() == ncols {
                0
            } else {
                return Err(Error::BadAxis {
                    context: format!("{}:{line_no}", path.display()),
                    axis: "x (first row)".into(),
                    message: format!(
                        "the first row holds {} cells, but the rows below hold {ncols} data \
                         columns{}",
                        row.len(),
                        if y_inline {
                            " (plus the y-axis value in the first column)"
                        } else {
                            ""
                        }
                    ),
                });
            };
            let mut xs = Vec::with_capacity(ncols);
            for (j, cell) in row.iter().enumerate().skip(start) {
                xs.push(parse_cell(cell).ok_or_else(|| not_a_number(path, line_no, j + 1, cell))?);
            }
            Some(xs)
        }
    };

    let data = Array2::from_shape_vec((nrows, ncols), values).map_err(|e| Error::BadArrayFile {
        path: path.to_path_buf(),
        message: format!("matrix of {nrows} × {ncols}: {e}"),
    })?;
    Ok(ParsedMatrix {
        data,
        x_axis,
        y_axis: y_inline.then_some(y_axis),
        delimiter,
    })
}

/// Read an axis vector from a separate file: a `.npy` 1D array (by its magic bytes) or text
/// with one value per line or all values on one row (any of the matrix delimiters).
pub(crate) fn read_axis_file(path: &Path) -> Result<Vec<f64>> {
    super::check_readable_file(path)?;
    let bytes = std::fs::read(path).map_err(|source| Error::Io {
        path: path.to_path_buf(),
        source,
    })?;
    if bytes.starts_with(super::npy::NPY_MAGIC) {
        return super::npy::axis_from_npy_bytes(path, &bytes);
    }
    let text = decode_text(path, &bytes)?;
    let mut out = Vec::new();
    let mut cells = Vec::new();
    for (line_no, _, line) in data_lines(text) {
        Delimiter::detect(line).split(line, &mut cells);
        for (j, cell) in cells.iter().enumerate() {
            out.push(parse_cell(cell).ok_or_else(|| not_a_number(path, line_no, j + 1, cell))?);
        }
    }
    if out.is_empty() {
        return Err(Error::EmptyFile {
            path: path.to_path_buf(),
        });
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::MatrixOptions;
    use crate::progress::NoProgress;
    use std::path::PathBuf;
    use std::sync::atomic::{AtomicUsize, Ordering};

    static COUNTER: AtomicUsize = AtomicUsize::new(0);

    /// A fresh scratch directory for one test.
    fn scratch() -> PathBuf {
        let d = std::env::temp_dir().join(format!(
            "fanmark-matrix-{}-{}",
            std::process::id(),
            COUNTER.fetch_add(1, Ordering::Relaxed)
        ));
        std::fs::create_dir_all(&d).unwrap();
        d
    }

    fn write(dir: &Path, name: &str, bytes: &[u8]) -> PathBuf {
        let p = dir.join(name);
        std::fs::write(&p, bytes).unwrap();
        p
    }

    fn load_with(path: &Path, m: MatrixOptions) -> Result<Map> {
        let opts = LoadOptions {
            matrix: m,
            ..LoadOptions::default()
        };
        load(path, &opts, &NoProgress)
    }

    #[test]
    fn inline_axes_with_corner_cell() {
        let d = scratch();
        let p = write(
            &d,
            "m.txt",
            b"# comment\nb\\vg -1 0 1\n0.0 10 11 12\n\n0.5 13 14 nan\n",
        );
        let m = load_with(&p, MatrixOptions::default()).unwrap();
        assert_eq!(m.x().values(), &[-1.0, 0.0, 1.0]);
        assert_eq!(m.y().values(), &[0.0, 0.5]);
        assert_eq!(m.x().quantity, Quantity::Gate);
        assert_eq!(m.y().quantity, Quantity::Field);
        let c = m.channel("rxx").unwrap();
        assert_eq!(c.kind, ChannelKind::Rxx);
        assert_eq!(c.data[[0, 2]], 12.0);
        assert_eq!(c.data[[1, 0]], 13.0);
        assert!(c.data[[1, 2]].is_nan());
    }

    #[test]
    fn corner_may_be_absent_and_bom_crlf_semicolons() {
        let d = scratch();
        let p = write(
            &d,
            "m.csv",
            b"\xEF\xBB\xBF-1;0;1\r\n0.0;10;11;12\r\n0.5;13;14;15\r\n",
        );
        let m = load_with(&p, MatrixOptions::default()).unwrap();
        assert_eq!(m.x().values(), &[-1.0, 0.0, 1.0]);
        assert_eq!(m.channel("rxx").unwrap().data[[1, 1]], 14.0);
    }

    #[test]
    fn units_from_headers_and_reversal() {
        // Gate in mV decreasing, field in mT decreasing, R_xy in kΩ.
        let d = scratch();
        let p = write(&d, "m.txt", b",200,100,0\n500,1,2,3\n0,4,5,6\n");
        let m = load_with(
            &p,
            MatrixOptions {
                x_header: Some("vg_mV".into()),
                y_header: Some("b_mT".into()),
                channel_header: Some("rxy_kohm".into()),
                ..MatrixOptions::default()
            },
        )
        .unwrap();
        assert_eq!(m.x().values(), &[0.0, 0.1, 0.2]);
        assert_eq!(m.y().values(), &[0.0, 0.5]);
        let c = m.channel("rxy").unwrap();
        assert_eq!(c.kind, ChannelKind::Rxy);
        // Row B = 0 (file row 2), column V_g = 0 (file column 3) held 6 kΩ.
        assert_eq!(c.data[[0, 0]], 6000.0);
        assert_eq!(c.data[[1, 2]], 1000.0);
        assert_eq!(c.data[[0, 2]], 4000.0);
        assert_eq!(
            m.meta
                .notes
                .iter()
                .filter(|n| n.contains("reversed"))
                .count(),
            2
        );
    }

    #[test]
    fn axis_files_text_and_length_mismatch() {
        let d = scratch();
        let p = write(&d, "m.txt", b"1\t2\t3\n4\t5\t6\n");
        let xf = write(&d, "x.txt", b"0.1\n0.2\n0.3\n");
        let yf = write(&d, "y.txt", b"2, 1\n");
        let m = load_with(
            &p,
            MatrixOptions {
                x_axis_file: Some(xf.clone()),
                y_axis_file: Some(yf),
                ..MatrixOptions::default()
            },
        )
        .unwrap();
        assert_eq!(m.x().values(), &[0.1, 0.2, 0.3]);
        assert_eq!(m.y().values(), &[1.0, 2.0]);
        assert_eq!(
            m.channel("rxx").unwrap().data.row(0).to_vec(),
            [4.0, 5.0, 6.0]
        );

        let yf3 = write(&d, "y3.txt", b"1\n2\n3\n");
        let e = load_with(
            &p,
            MatrixOptions {
                x_axis_file: Some(xf),
                y_axis_file: Some(yf3),
                ..MatrixOptions::default()
            },
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("m.txt") && e.contains("y3.txt"), "{e}");
        assert!(e.contains("3 values") && e.contains("2 rows"), "{e}");
    }

    #[test]
    fn constant_and_non_monotonic_axes() {
        let d = scratch();
        let p = write(&d, "c.txt", b"x 1 1 1\n0 1 2 3\n1 4 5 6\n");
        let e = load_with(&p, MatrixOptions::default()).unwrap_err();
        assert!(matches!(e, Error::BadAxis { .. }));
        let e = e.to_string();
        assert!(
            e.contains("c.txt") && e.contains("vg_V") && e.contains("constant"),
            "{e}"
        );

        let p = write(&d, "n.txt", b"x 1 2 3\n0 1 2 3\n1 4 5 6\n0.5 7 8 9\n");
        let e = load_with(&p, MatrixOptions::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("n.txt") && e.contains("b_T") && e.contains("not monotonic"),
            "{e}"
        );
        assert!(e.contains("point 3"), "{e}");
    }

    #[test]
    fn bad_cells_ragged_rows_and_empty_files() {
        let d = scratch();
        let p = write(&d, "bad.txt", b"x 1 2\n0 1 2\n1 4 oops\n");
        let e = load_with(&p, MatrixOptions::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("bad.txt:3") && e.contains("column 3") && e.contains("oops"),
            "{e}"
        );

        let p = write(&d, "rag.txt", b"x 1 2\n0 1 2\n1 4\n");
        let e = load_with(&p, MatrixOptions::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("rag.txt:3") && e.contains("2 cells") && e.contains("has 3"),
            "{e}"
        );

        let p = write(&d, "empty.txt", b"# only a comment\n\n");
        let e = load_with(&p, MatrixOptions::default()).unwrap_err();
        assert!(matches!(e, Error::EmptyFile { .. }), "{e}");
        assert!(e.to_string().contains("empty.txt"));

        let p = write(&d, "inf.txt", b"x 1 2\n0 1 inf\n");
        let e = load_with(&p, MatrixOptions::default())
            .unwrap_err()
            .to_string();
        assert!(e.contains("inf.txt:2") && e.contains("`inf`"), "{e}");
    }

    #[test]
    fn axis_row_length_must_match() {
        let d = scratch();
        let p = write(&d, "w.txt", b"x 1 2 3 4\n0 1 2\n1 4 5\n");
        let e = load_with(&p, MatrixOptions::default())
            .unwrap_err()
            .to_string();
        assert!(
            e.contains("w.txt:1") && e.contains("5 cells") && e.contains("2 data"),
            "{e}"
        );
    }

    #[test]
    fn wrong_roles_for_headers_are_refused() {
        let d = scratch();
        let p = write(&d, "m.txt", b"x 1 2\n0 1 2\n");
        let e = load_with(
            &p,
            MatrixOptions {
                x_header: Some("rxx_ohm".into()),
                ..MatrixOptions::default()
            },
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("rxx_ohm"), "{e}");
        let e = load_with(
            &p,
            MatrixOptions {
                channel_header: Some("b_T".into()),
                ..MatrixOptions::default()
            },
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("b_T") && e.contains("coordinate"), "{e}");
    }

    #[test]
    fn other_channel_keeps_si_unit_of_its_dimension() {
        let d = scratch();
        let p = write(&d, "m.txt", b"x 1 2\n0 3 4\n");
        let m = load_with(
            &p,
            MatrixOptions {
                channel_header: Some("vxx_mV".into()),
                ..MatrixOptions::default()
            },
        )
        .unwrap();
        let c = &m.channels()[0];
        assert_eq!(c.kind, ChannelKind::Other);
        assert_eq!(c.unit, "V");
        assert!((c.data[[0, 1]] - 4e-3).abs() < 1e-15);
    }
}

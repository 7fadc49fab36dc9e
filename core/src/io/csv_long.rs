//! Long-format delimited text: one row per measured point, columns found by header name.
//!
//! The delimiter (comma, tab, semicolon, or runs of blanks) is detected from the header line.
//! Comment lines starting with `#`, blank lines, a UTF-8 byte-order mark and Windows line ends
//! are accepted. Empty cells are missing values (NaN). The file is read in blocks of whole lines;
//! each block is cut at line ends into chunks ([`super::blocks`]) parsed in parallel, each chunk
//! to its own columns, joined in file order. While one block is parsed, the block before it is
//! cut into sweeps and the next one is read. The points then go to [`crate::grid`]. Progress is
//! reported in bytes.
//!
//! A line of plain numbers is read in one pass without splitting it into cells
//! ([`super::decimal`], correctly rounded); any other line (comments, blanks, quotes, empty
//! cells, errors) goes through the general cell-by-cell rules, so both give the same values.

use super::blocks::fill;
use super::columns::{recognise, Recognised, Role};
use super::LoadOptions;
use crate::error::{Error, Result};
use crate::grid::{grid_flat, FlatSweeps, SweepSet, SweepSpan};
use crate::map::{ChannelKind, Map, SweepDirection};
use crate::progress::Progress;
use std::path::{Path, PathBuf};

/// The column delimiter of a file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Delimiter {
    /// A single byte: `,`, `\t` or `;`.
    Byte(u8),
    /// One or more spaces or tabs.
    Blanks,
}

impl Delimiter {
    fn describe(self) -> String {
        match self {
            Delimiter::Byte(b'\t') => "tab".into(),
            Delimiter::Byte(b) => (b as char).to_string(),
            Delimiter::Blanks => "blanks".into(),
        }
    }
}

/// Pick the delimiter of a header line: the most frequent of `,` `\t` `;`, else blanks.
pub fn detect_delimiter(header: &str) -> Delimiter {
    let count = |c: u8| header.bytes().filter(|&b| b == c).count();
    let best = [b',', b'\t', b';']
        .into_iter()
        .map(|c| (count(c), c))
        .max_by_key(|&(n, _)| n)
        .filter(|&(n, _)| n > 0);
    match best {
        Some((_, c)) => Delimiter::Byte(c),
        None => Delimiter::Blanks,
    }
}

/// What each header column is, and which two are the map's coordinates.
#[derive(Debug, Clone)]
struct Layout {
    headers: Vec<String>,
    delimiter: Delimiter,
    /// Column indices of the two coordinates, in header order.
    coords: [usize; 2],
    /// Recognised coordinate descriptions.
    coord_info: [Recognised; 2],
    /// Channel columns: (column index, name, recognised).
    channels: Vec<(usize, String, Recognised)>,
    /// A temperature column not used as an axis.
    temperature: Option<(usize, f64)>,
}

fn split_fields(line: &str, d: Delimiter) -> Vec<&str> {
    match d {
        Delimiter::Byte(b) => line.split(b as char).collect(),
        Delimiter::Blanks => line.split([' ', '\t']).filter(|s| !s.is_empty()).collect(),
    }
}

fn layout(path: &Path, header: &str, opts: &LoadOptions) -> Result<Layout> {
    let delimiter = detect_delimiter(header);
    let headers: Vec<String> = split_fields(header, delimiter)
        .into_iter()
        .map(|h| h.trim().trim_matches('"').trim().to_string())
        .collect();
    let found = headers.join(", ");
    let columns_err = |message: String, needed: &str| Error::Columns {
        path: path.to_path_buf(),
        message,
        found: found.clone(),
        needed: needed.to_string(),
    };
    let mut roles: Vec<Recognised> = Vec::with_capacity(headers.len());
    for h in &headers {
        roles.push(recognise(h).map_err(|e| columns_err(e.to_string(), "units that fit"))?);
    }
    // An explicit mapping overrides recognition by name.
    for (role, header) in &opts.columns {
        let i = headers
            .iter()
            .position(|h| h == header || h.eq_ignore_ascii_case(header))
            .ok_or_else(|| {
                columns_err(
                    format!("the mapping names column `{header}`, which is not in the header"),
                    "every mapped column to exist",
                )
            })?;
        // The unit still comes from the header text if it has one that fits.
        let unit = recognise(&headers[i])
            .ok()
            .filter(|r| Some(r.unit.dimension) == role.dimension())
            .map(|r| r.unit)
            .unwrap_or_else(|| role.default_unit());
        // A role taken from another column by the mapping is released there.
        for (j, r) in roles.iter_mut().enumerate() {
            if j != i && r.role == *role {
                r.role = Role::Other(headers[j].clone());
            }
        }
        roles[i] = Recognised {
            role: role.clone(),
            unit,
        };
    }
    let find = |role: &Role| roles.iter().position(|r| &r.role == role);
    for (i, r) in roles.iter().enumerate() {
        if r.role.is_coordinate() || !matches!(r.role, Role::Other(_)) {
            if let Some(j) = roles[i + 1..].iter().position(|q| q.role == r.role) {
                return Err(columns_err(
                    format!(
                        "columns `{}` and `{}` both look like {}; say which to use with a column mapping",
                        headers[i],
                        headers[i + 1 + j],
                        r.role.name()
                    ),
                    "one column per role",
                ));
            }
        }
    }
    let gate_like = [Role::Gate, Role::Density, Role::BottomGate, Role::TopGate]
        .iter()
        .find_map(find);
    let coords = match (
        find(&Role::TopGate),
        find(&Role::BottomGate),
        find(&Role::Field),
    ) {
        (Some(t), Some(b), _) => [b, t],
        _ => match (gate_like, find(&Role::Field), find(&Role::Temperature)) {
            (Some(g), Some(f), _) => [g, f],
            (Some(g), None, Some(t)) => [g, t],
            (None, Some(f), Some(t)) => [f, t],
            _ => {
                return Err(columns_err(
                    "could not find two coordinate columns".into(),
                    "a gate column (vg_V, gate, V_g…) or density (n_cm2) and a field column \
                     (b_T, B, field…), or top and bottom gates (vt_V, vb_V); map them with \
                     --columns gate=NAME,field=NAME",
                ))
            }
        },
    };
    let mut channels = Vec::new();
    let mut temperature = None;
    for (i, r) in roles.iter().enumerate() {
        if coords.contains(&i) {
            continue;
        }
        match &r.role {
            Role::Temperature => temperature = Some((i, r.unit.to_si)),
            Role::Other(name) => channels.push((i, name.clone(), r.clone())),
            role if role.is_coordinate() => {
                channels.push((i, role.name(), r.clone()));
            }
            role => channels.push((i, role.name(), r.clone())),
        }
    }
    if channels.is_empty() {
        return Err(columns_err(
            "no data column besides the coordinates".into(),
            "at least one of rxx_ohm, rxy_ohm, sxx, sxy or another numeric column",
        ));
    }
    Ok(Layout {
        coord_info: [roles[coords[0]].clone(), roles[coords[1]].clone()],
        headers,
        delimiter,
        coords,
        channels,
        temperature,
    })
}

/// Points parsed from one piece of a block, in file order. The buffers are reused from block
/// to block, so a file's worth of points costs one allocation per column.
#[derive(Default)]
struct Piece {
    /// Per slot: 0 = a, 1 = b, 2.. = channels, then temperature if the file has one.
    cols: Vec<Vec<f64>>,
    /// (point index, line number) at the first point and after every skipped line; the line of
    /// any other point follows by counting.
    marks: Vec<(usize, usize)>,
    /// Number of line ends in the piece.
    line_ends: usize,
}

impl Piece {
    fn len(&self) -> usize {
        self.cols.first().map_or(0, Vec::len)
    }

    /// The 1-based file line of point `i`.
    fn line_of(&self, i: usize) -> usize {
        let k = self.marks.partition_point(|&(p, _)| p <= i);
        let (p, line) = self.marks[k.saturating_sub(1)];
        line + (i - p)
    }
}

/// A column's destination in a parsed row.
const SKIP: usize = usize::MAX;

struct ParseCtx<'a> {
    path: &'a Path,
    layout: &'a Layout,
    /// For each header column: its slot in [`Piece::cols`], or [`SKIP`].
    slots: Vec<usize>,
    scales: Vec<f64>,
    /// Number of slots (coordinates, channels and temperature).
    nslots: usize,
}

#[inline]
fn parse_number(field: &[u8]) -> Option<f64> {
    let mut s = field;
    while let [b' ' | b'"', rest @ ..] = s {
        s = rest;
    }
    while let [rest @ .., b' ' | b'"' | b'\r'] = s {
        s = rest;
    }
    if s.is_empty() {
        return Some(f64::NAN);
    }
    fast_float2::parse::<f64, _>(s).ok()
}

impl ParseCtx<'_> {
    /// Parse `bytes` (whole lines; `first_line` lines precede them in the file) into `p`.
    fn parse_piece(&self, bytes: &[u8], first_line: usize, p: &mut Piece) -> Result<()> {
        if p.cols.len() != self.nslots {
            p.cols = vec![Vec::new(); self.nslots];
        }
        if p.cols[0].capacity() == 0 {
            let est = bytes.len() / 40 + 1;
            for c in &mut p.cols {
                c.reserve(est);
            }
        }
        for c in &mut p.cols {
            c.clear();
        }
        p.marks.clear();
        let mut row = vec![f64::NAN; self.nslots];
        let mut line_no = first_line;
        let mut mark = true;
        let mut pos = 0;
        let n = bytes.len();
        while pos < n {
            line_no += 1;
            let next = match self.fast_row(bytes, pos, &mut row) {
                Some(next) => next,
                None => {
                    let end = memchr::memchr(b'\n', &bytes[pos..]).map_or(n, |i| pos + i);
                    let next = (end + 1).min(n);
                    if !self.slow_row(&bytes[pos..end], line_no, &mut row)? {
                        mark = true;
                        pos = next;
                        continue;
                    }
                    next
                }
            };
            if mark {
                p.marks.push((p.len(), line_no));
                mark = false;
            }
            for (c, &v) in p.cols.iter_mut().zip(&row) {
                c.push(v);
            }
            pos = next;
        }
        let lines = line_no - first_line;
        p.line_ends = if n > 0 && bytes[n - 1] != b'\n' {
            lines - 1
        } else {
            lines
        };
        Ok(())
    }

    /// A line of plain numbers separated by the single-byte delimiter, read without splitting:
    /// the row and the index after its line end, or None for anything else (comments, blanks,
    /// quotes, empty cells, errors), which [`Self::slow_row`] then handles.
    #[inline]
    fn fast_row(&self, bytes: &[u8], start: usize, row: &mut [f64]) -> Option<usize> {
        let Delimiter::Byte(d) = self.layout.delimiter else {
            return None;
        };
        let last = self.slots.len() - 1;
        let mut i = start;
        for (idx, &slot) in self.slots.iter().enumerate() {
            if slot == SKIP {
                while i < bytes.len() && bytes[i] != d && bytes[i] != b'\n' {
                    i += 1;
                }
            } else {
                let (v, end) = super::decimal::read_number(bytes, i)?;
                row[slot] = v * self.scales[idx];
                i = end;
            }
            let here = bytes.get(i).copied();
            if idx < last {
                if here != Some(d) {
                    return None;
                }
                i += 1;
            } else {
                return match here {
                    None => Some(i),
                    Some(b'\n') => Some(i + 1),
                    Some(b'\r') if bytes.get(i + 1) == Some(&b'\n') => Some(i + 2),
                    _ => None,
                };
            }
        }
        None
    }

    /// One line by the general rules. Ok(false) for a blank or comment line.
    fn slow_row(&self, line: &[u8], line_no: usize, row: &mut [f64]) -> Result<bool> {
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        let trimmed = line.trim_ascii_start();
        if trimmed.is_empty() || trimmed[0] == b'#' {
            return Ok(false);
        }
        let nfields = self.layout.headers.len();
        let mut count = 0usize;
        let mut handle = |idx: usize, field: &[u8]| -> Result<()> {
            if idx < nfields && self.slots[idx] != SKIP {
                let v =
                    parse_number(field).ok_or_else(|| self.bad_cell(line, line_no, idx, field))?;
                row[self.slots[idx]] = v * self.scales[idx];
            }
            Ok(())
        };
        match self.layout.delimiter {
            Delimiter::Byte(d) => {
                for field in line.split(|&c| c == d) {
                    handle(count, field)?;
                    count += 1;
                }
            }
            Delimiter::Blanks => {
                for f in line
                    .split(|&c| c == b' ' || c == b'\t')
                    .filter(|f| !f.is_empty())
                {
                    handle(count, f)?;
                    count += 1;
                }
            }
        }
        if count != nfields {
            return Err(self.bad_count(line, line_no, count));
        }
        Ok(true)
    }

    fn other_delimiter(&self, line: &[u8]) -> Option<u8> {
        let own = match self.layout.delimiter {
            Delimiter::Byte(b) => b,
            Delimiter::Blanks => return None,
        };
        [b',', b'\t', b';']
            .into_iter()
            .find(|&c| c != own && line.contains(&c))
    }

    fn mixed(&self, line_no: usize, other: u8) -> Error {
        Error::MixedDelimiters {
            path: self.path.to_path_buf(),
            line: line_no,
            expected: self.layout.delimiter.describe(),
            found: Delimiter::Byte(other).describe(),
        }
    }

    fn bad_cell(&self, line: &[u8], line_no: usize, idx: usize, field: &[u8]) -> Error {
        if let Some(o) = self.other_delimiter(line) {
            return self.mixed(line_no, o);
        }
        Error::NotANumber {
            path: self.path.to_path_buf(),
            line: line_no,
            column: format!("{} (`{}`)", idx + 1, self.layout.headers[idx]),
            text: String::from_utf8_lossy(field).trim().to_string(),
        }
    }

    fn bad_count(&self, line: &[u8], line_no: usize, found: usize) -> Error {
        if let Some(o) = self.other_delimiter(line) {
            return self.mixed(line_no, o);
        }
        Error::FieldCount {
            path: self.path.to_path_buf(),
            line: line_no,
            expected: self.layout.headers.len(),
            found,
        }
    }
}

/// Cuts the point stream into sweeps: a new sweep starts where the stepped coordinate changes
/// or the swept coordinate reverses direction.
struct SweepCutter {
    swept_is_a: Option<bool>,
    tol: f64,
    flat: FlatSweeps,
    /// The open sweep (its span grows as points arrive).
    current: Option<SweepSpan>,
    dir: i8,
    points: usize,
}

impl SweepCutter {
    fn push_piece(&mut self, p: &Piece) {
        let (a, b) = (&p.cols[0], &p.cols[1]);
        let swept_is_a = self.swept_is_a.unwrap_or(true);
        let (sw, st) = if swept_is_a { (a, b) } else { (b, a) };
        let nch = self.flat.values.len();
        self.points += sw.len();
        // Points of the piece not yet copied into the store start at `from`.
        let mut from = 0;
        for i in 0..sw.len() {
            let (x, y) = (sw[i], st[i]);
            let last = match &self.current {
                None => None,
                Some(cur) => Some(if i > from {
                    sw[i - 1]
                } else {
                    self.flat.swept[cur.start + cur.len - 1]
                }),
            };
            let new = match (&self.current, last) {
                (Some(cur), Some(last)) => {
                    let same_step = (y - cur.step_value).abs() <= self.tol
                        || (y.is_nan() && cur.step_value.is_nan());
                    let d = (x - last).signum() as i8;
                    let reversed = x != last && self.dir != 0 && d != self.dir;
                    !same_step || reversed
                }
                _ => true,
            };
            if new {
                self.copy(p, sw, from, i, nch);
                from = i;
                self.close();
                self.current = Some(SweepSpan {
                    start: self.flat.swept.len(),
                    len: 0,
                    step_value: y,
                    direction: SweepDirection::Unknown,
                    first_line: p.line_of(i),
                });
                self.dir = 0;
            } else if self.dir == 0 {
                if let Some(last) = last {
                    if x != last && x.is_finite() && last.is_finite() {
                        self.dir = if x > last { 1 } else { -1 };
                    }
                }
            }
        }
        self.copy(p, sw, from, sw.len(), nch);
    }

    /// Append points `from..to` of the piece to the open sweep.
    fn copy(&mut self, p: &Piece, sw: &[f64], from: usize, to: usize, nch: usize) {
        if to <= from {
            return;
        }
        if let Some(cur) = self.current.as_mut() {
            cur.len += to - from;
        }
        self.flat.swept.extend_from_slice(&sw[from..to]);
        for (c, v) in self.flat.values.iter_mut().enumerate().take(nch) {
            v.extend_from_slice(&p.cols[2 + c][from..to]);
        }
    }

    fn close(&mut self) {
        if let Some(mut s) = self.current.take() {
            s.direction = match self.dir {
                1 => SweepDirection::Up,
                -1 => SweepDirection::Down,
                _ => SweepDirection::Unknown,
            };
            self.flat.spans.push(s);
        }
    }
}

/// Where parsed pieces go, in file order: the sweep cutter and the temperature column's mean.
struct PointSink {
    cutter: SweepCutter,
    /// Sum and count of finite temperatures.
    temps: (f64, usize),
    /// The temperature column's slot in [`Piece::cols`], if the file has one.
    temperature_slot: Option<usize>,
    /// File size in bytes, to estimate the number of points from the first block.
    total_bytes: u64,
}

impl PointSink {
    /// Take the pieces of one block (`bytes` long) in order.
    fn take(&mut self, pieces: &[Piece], bytes: usize) {
        if pieces.is_empty() {
            return;
        }
        let c = &mut self.cutter;
        if c.swept_is_a.is_none() {
            // The coordinate that changes more often over the first block is the swept one.
            let changes = |col: usize| {
                let mut v = pieces.iter().flat_map(|p| p.cols[col].iter().copied());
                let Some(mut last) = v.next() else { return 0 };
                v.filter(|&x| std::mem::replace(&mut last, x) != x).count()
            };
            c.swept_is_a = Some(changes(0) >= changes(1));
            // Reserve the whole file's worth of points once (estimated from the first block):
            // untouched capacity costs no memory, repeated doubling would.
            let rows = pieces.iter().map(Piece::len).sum::<usize>().max(1);
            let est = (self.total_bytes as f64 / bytes.max(1) as f64 * rows as f64 * 1.02) as usize;
            c.flat.swept.reserve(est);
            for v in &mut c.flat.values {
                v.reserve(est);
            }
        }
        for p in pieces {
            c.push_piece(p);
            if let Some(slot) = self.temperature_slot {
                for &t in &p.cols[slot] {
                    if t.is_finite() {
                        self.temps = (self.temps.0 + t, self.temps.1 + 1);
                    }
                }
            }
        }
    }
}

/// Read the header: skips a BOM, blank and `#` lines. Returns the header text, the number of
/// bytes consumed and the 1-based line number of the header.
fn read_header(path: &Path, head: &[u8]) -> Result<(String, usize, usize)> {
    let mut pos = if head.starts_with(b"\xEF\xBB\xBF") {
        3
    } else {
        0
    };
    let mut line_no = 0;
    loop {
        if pos >= head.len() {
            return Err(if head.iter().all(|b| b.is_ascii_whitespace()) {
                Error::EmptyFile {
                    path: path.to_path_buf(),
                }
            } else {
                Error::HeaderOnly {
                    path: path.to_path_buf(),
                }
            });
        }
        let end = memchr::memchr(b'\n', &head[pos..]).map_or(head.len(), |i| pos + i);
        line_no += 1;
        let line = &head[pos..end];
        let line = line.strip_suffix(b"\r").unwrap_or(line);
        let next = (end + 1).min(head.len());
        let t = line.trim_ascii();
        if !t.is_empty() && t[0] != b'#' {
            let text = std::str::from_utf8(line).map_err(|_| Error::UnsupportedFormat {
                path: path.to_path_buf(),
                message: format!("line {line_no}: the header is not UTF-8 text"),
            })?;
            if end == head.len() && !head.ends_with(b"\n") {
                // The header is the last thing in the file.
                return Err(Error::HeaderOnly {
                    path: path.to_path_buf(),
                });
            }
            return Ok((text.to_string(), next, line_no));
        }
        pos = next;
    }
}

/// Load a long-format delimited text file into a gridded [`Map`]: [`read_points`], then
/// [`crate::grid`].
pub fn load(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<Map> {
    let p = read_points(path, opts, progress)?;
    let mut map = grid_flat(p.set, p.flat, p.swept_on_x, &opts.grid, opts.duplicates)
        .map_err(|e| with_path(e, path))?;
    map.meta.columns = p.columns;
    map.meta.temperature_k = p.temperature_k;
    map.meta.notes.push(p.delimiter_note);
    Ok(map)
}

/// The points of a long-format file as read, cut into sweeps in file order, before gridding.
pub struct FilePoints {
    /// Names and quantities of the coordinates and channels (the sweeps are in `flat`).
    pub set: SweepSet,
    /// Every point's swept coordinate and channel values, with the sweeps' spans.
    pub flat: FlatSweeps,
    /// Whether the swept coordinate belongs on the map's x axis.
    pub swept_on_x: bool,
    /// (role, header) of each column used.
    pub columns: Vec<(String, String)>,
    /// Mean temperature of a temperature column, K.
    pub temperature_k: Option<f64>,
    /// A note naming the delimiter.
    pub delimiter_note: String,
}

impl FilePoints {
    /// Number of points read.
    pub fn len(&self) -> usize {
        self.flat.swept.len()
    }

    /// True when no point was read (never for a returned value: a file without points is an
    /// error).
    pub fn is_empty(&self) -> bool {
        self.flat.swept.is_empty()
    }
}

/// Read a long-format delimited text file into its points and sweeps (the parsing half of
/// [`load`]).
pub fn read_points(path: &Path, opts: &LoadOptions, progress: &dyn Progress) -> Result<FilePoints> {
    read_points_in(path, opts, progress, Blocking::STANDARD)
}

/// How a file is read: bytes per block, and how finely a block is cut for parallel parsing.
#[derive(Debug, Clone, Copy)]
struct Blocking {
    /// Bytes read per block.
    block: usize,
    /// Chunks per block at most.
    chunks: usize,
    /// Smallest chunk worth a task of its own, bytes.
    min_chunk: usize,
}

impl Blocking {
    /// 8 MiB blocks in up to 16 chunks of at least 64 KiB: more chunks than threads, so the
    /// thread that reads the next block and cuts the last one into sweeps then takes a share.
    const STANDARD: Blocking = Blocking {
        block: 8 << 20,
        chunks: 16,
        min_chunk: 64 << 10,
    };
}

/// Parse the chunks of `block` (cut at `bounds`; `line_base` lines precede it in the file) in
/// parallel into `pieces`, and number their lines. On a bad line, the error of the first bad
/// chunk in file order (its own first bad line, as a sequential parse would report).
fn parse_block(
    ctx: &ParseCtx,
    block: &[u8],
    bounds: &[usize],
    line_base: usize,
    pieces: &mut [Piece],
) -> Result<()> {
    use rayon::prelude::*;
    // Each chunk numbers its lines from 0; the bases follow once every chunk has counted its
    // line ends.
    let results: Vec<Result<()>> = pieces
        .par_iter_mut()
        .zip(bounds.par_windows(2))
        .map(|(p, w)| ctx.parse_piece(&block[w[0]..w[1]], 0, p))
        .collect();
    let mut base = line_base;
    for (k, r) in results.into_iter().enumerate() {
        if r.is_err() {
            // Parse that chunk again knowing where it starts, for the error's line number.
            let chunk = &block[bounds[k]..bounds[k + 1]];
            return ctx.parse_piece(chunk, base, &mut pieces[k]);
        }
        let p = &mut pieces[k];
        for m in &mut p.marks {
            m.1 += base;
        }
        base += p.line_ends;
    }
    Ok(())
}

/// [`read_points`] with a given blocking (tests cut files finely to reach every boundary case).
fn read_points_in(
    path: &Path,
    opts: &LoadOptions,
    progress: &dyn Progress,
    blocking: Blocking,
) -> Result<FilePoints> {
    let io = |source| Error::Io {
        path: path.to_path_buf(),
        source,
    };
    let (mut file, total) = super::open_nonempty(path)?;
    progress.start("reading", total);
    let capacity = blocking.block + (64 << 10);
    let mut text: Vec<u8> = Vec::with_capacity(capacity);
    // Read until the first block holds the header line.
    let mut eof = fill(&mut file, &mut text, blocking.block).map_err(io)?;
    let (header, consumed, header_line) = read_header(path, &text)?;
    let lay = layout(path, &header, opts)?;
    let nch = lay.channels.len();
    let mut slots = vec![SKIP; lay.headers.len()];
    let mut scales = vec![1.0; lay.headers.len()];
    slots[lay.coords[0]] = 0;
    slots[lay.coords[1]] = 1;
    scales[lay.coords[0]] = lay.coord_info[0].unit.to_si;
    scales[lay.coords[1]] = lay.coord_info[1].unit.to_si;
    for (k, (i, _, r)) in lay.channels.iter().enumerate() {
        slots[*i] = 2 + k;
        scales[*i] = r.unit.to_si;
    }
    if let Some((i, s)) = lay.temperature {
        slots[i] = 2 + nch;
        scales[i] = s;
    }
    let ctx = ParseCtx {
        path,
        layout: &lay,
        slots,
        scales,
        nslots: 2 + nch + usize::from(lay.temperature.is_some()),
    };
    let mut sink = PointSink {
        cutter: SweepCutter {
            swept_is_a: None,
            tol: opts.grid.step_tolerance.unwrap_or(0.0),
            flat: FlatSweeps {
                values: vec![Vec::new(); lay.channels.len()],
                ..FlatSweeps::default()
            },
            current: None,
            dir: 0,
            points: 0,
        },
        temps: (0.0, 0),
        temperature_slot: lay.temperature.map(|_| 2 + nch),
        total_bytes: total,
    };
    let mut line_base = header_line;
    let mut done_bytes = consumed as u64;
    text.drain(..consumed);
    // Pipeline: while the chunks of one block are parsed, the block before it is cut into
    // sweeps and the next one is read.
    let mut next: Vec<u8> = Vec::with_capacity(capacity);
    let mut parsing: Vec<Piece> = Vec::new();
    let mut parsed: Vec<Piece> = Vec::new();
    let mut parsed_bytes = 0usize;
    loop {
        // Parse complete lines only; the tail starts the next block.
        let cut = loop {
            if eof {
                break text.len();
            }
            if let Some(i) = memchr::memrchr(b'\n', &text) {
                break i + 1;
            }
            if text.len() > 64 << 20 {
                return Err(Error::UnsupportedFormat {
                    path: path.to_path_buf(),
                    message: format!("line {} is longer than 64 MiB", line_base + 1),
                });
            }
            eof = fill(&mut file, &mut text, blocking.block).map_err(io)?;
        };
        let (block, tail) = text.split_at(cut);
        let nchunks = (block.len() / blocking.min_chunk.max(1)).clamp(1, blocking.chunks);
        let bounds = super::blocks::chunk_bounds(block, nchunks);
        let n = bounds.len() - 1;
        if parsing.len() < n {
            parsing.resize_with(n, Piece::default);
        }
        let last_block = eof;
        let (parse, read) = rayon::join(
            || parse_block(&ctx, block, &bounds, line_base, &mut parsing[..n]),
            || {
                sink.take(&parsed, parsed_bytes);
                next.clear();
                next.extend_from_slice(tail);
                if last_block {
                    Ok(true)
                } else {
                    fill(&mut file, &mut next, blocking.block)
                }
            },
        );
        parse?;
        eof = read.map_err(io)?;
        parsing.truncate(n);
        line_base += parsing.iter().map(|p| p.line_ends).sum::<usize>();
        done_bytes += cut as u64;
        progress.set(done_bytes);
        parsed_bytes = cut;
        std::mem::swap(&mut parsing, &mut parsed);
        std::mem::swap(&mut text, &mut next);
        if last_block {
            break;
        }
    }
    sink.take(&parsed, parsed_bytes);
    progress.finish();
    let PointSink {
        mut cutter, temps, ..
    } = sink;
    cutter.close();
    if cutter.points == 0 {
        return Err(Error::HeaderOnly {
            path: path.to_path_buf(),
        });
    }
    let swept_is_a = cutter.swept_is_a.unwrap_or(true);
    let (swept_i, stepped_i) = if swept_is_a { (0, 1) } else { (1, 0) };
    let quantity = |k: usize| {
        lay.coord_info[k]
            .role
            .quantity()
            .unwrap_or(crate::map::Quantity::Other)
    };
    // Gate-like coordinates go on x, so a field sweep at fixed gate ends up transposed.
    let swept_on_x = swept_i == 0;
    let set = SweepSet {
        context: path.display().to_string(),
        swept_name: lay.headers[lay.coords[swept_i]].clone(),
        swept_quantity: quantity(swept_i),
        stepped_name: lay.headers[lay.coords[stepped_i]].clone(),
        stepped_quantity: quantity(stepped_i),
        channels: lay
            .channels
            .iter()
            .map(|(_, name, r)| {
                let kind = r.role.channel_kind();
                let unit = if kind == ChannelKind::Other {
                    r.unit.dimension.si_symbol().to_string()
                } else {
                    String::new()
                };
                (name.clone(), kind, unit)
            })
            .collect(),
        sweeps: Vec::new(),
    };
    let columns = {
        let mut c = vec![
            (
                lay.coord_info[0].role.name(),
                lay.headers[lay.coords[0]].clone(),
            ),
            (
                lay.coord_info[1].role.name(),
                lay.headers[lay.coords[1]].clone(),
            ),
        ];
        c.extend(
            lay.channels
                .iter()
                .map(|(i, name, _)| (name.clone(), lay.headers[*i].clone())),
        );
        c
    };
    Ok(FilePoints {
        set,
        flat: cutter.flat,
        swept_on_x,
        columns,
        temperature_k: (temps.1 > 0).then(|| temps.0 / temps.1 as f64),
        delimiter_note: format!("delimiter: {}", lay.delimiter.describe()),
    })
}

fn with_path(e: Error, path: &Path) -> Error {
    match e {
        Error::DuplicatePoints {
            count, line, axes, ..
        } => Error::DuplicatePoints {
            path: PathBuf::from(path),
            count,
            line,
            axes,
        },
        other => other,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::io::{load_map, DuplicatePolicy, LoadOptions};
    use crate::map::Quantity;
    use crate::progress::NoProgress;

    fn write(dir: &tempfile::TempDir, name: &str, text: &str) -> std::path::PathBuf {
        let p = dir.path().join(name);
        std::fs::write(&p, text).unwrap();
        p
    }

    fn load_text(text: &str) -> Result<Map> {
        let dir = tempfile::tempdir().unwrap();
        let p = write(&dir, "m.csv", text);
        load_map(&p, &LoadOptions::default(), &NoProgress)
    }

    fn err_text(text: &str) -> String {
        load_text(text).unwrap_err().to_string()
    }

    /// A regular 3 × 2 map: gate fastest, two field rows.
    const REGULAR: &str = "vg_V,b_T,rxx_ohm,rxy_kohm\n\
        -1,0.5,100,1\n0,0.5,110,2\n1,0.5,120,3\n\
        -1,1.0,200,4\n0,1.0,210,5\n1,1.0,220,6\n";

    #[test]
    fn regular_file_is_exact_and_converted_to_si() {
        let m = load_text(REGULAR).unwrap();
        assert_eq!(m.shape(), (2, 3));
        assert_eq!(m.x().quantity, Quantity::Gate);
        assert_eq!(m.y().quantity, Quantity::Field);
        assert_eq!(m.x().values(), &[-1.0, 0.0, 1.0]);
        assert_eq!(m.y().values(), &[0.5, 1.0]);
        let rxy = m.channel("rxy").unwrap();
        // kΩ → Ω.
        assert_eq!(rxy.data[[1, 2]], 6000.0);
        assert_eq!(m.channel("rxx").unwrap().data[[0, 1]], 110.0);
        let g = m.meta.gridding.as_ref().unwrap();
        assert!(g.exact);
        assert_eq!((g.sweeps, g.rows, g.columns, g.points_read), (2, 2, 3, 6));
        assert!(matches!(m.raw, crate::map::RawPoints::GridIsExact));
    }

    #[test]
    fn tsv_semicolon_blanks_bom_crlf_comments() {
        let tsv = REGULAR.replace(',', "\t");
        assert_eq!(load_text(&tsv).unwrap().shape(), (2, 3));
        let semi = REGULAR.replace(',', ";");
        assert_eq!(load_text(&semi).unwrap().shape(), (2, 3));
        let blanks = REGULAR.replace(',', "  ");
        assert_eq!(load_text(&blanks).unwrap().shape(), (2, 3));
        let crlf = format!(
            "\u{feff}# device wren, cooldown 3\n\n{}",
            REGULAR.replace('\n', "\r\n")
        );
        let m = load_text(&crlf).unwrap();
        assert_eq!(m.channel("rxy").unwrap().data[[0, 0]], 1000.0);
        let commented = REGULAR.replace("0,1.0,210,5\n", "# a note\n0,1.0,210,5\n\n");
        assert_eq!(
            load_text(&commented).unwrap().channel("rxx").unwrap().data[[1, 1]],
            210.0
        );
    }

    #[test]
    fn field_sweeps_at_fixed_gate_are_transposed_onto_gate_columns() {
        // Field varies fastest: each gate value is one field sweep.
        let t = "gate_mV,field_mT,rxx\n-500,0,1\n-500,100,2\n-500,200,3\n500,0,4\n500,100,5\n500,200,6\n";
        let m = load_text(t).unwrap();
        assert_eq!(m.x().quantity, Quantity::Gate);
        assert_eq!(m.x().values(), &[-0.5, 0.5]);
        assert!((m.y().values()[2] - 0.2).abs() < 1e-15);
        assert_eq!(m.shape(), (3, 2));
        assert_eq!(m.channel("rxx").unwrap().data[[2, 1]], 6.0);
    }

    #[test]
    fn zero_field_is_legal_data() {
        let t = "vg_V,b_T,rxx_ohm\n0,0,5\n1,0,6\n0,1,7\n1,1,8\n";
        let m = load_text(t).unwrap();
        assert_eq!(m.y().values(), &[0.0, 1.0]);
    }

    #[test]
    fn empty_and_header_only() {
        assert!(err_text("").contains("empty"));
        assert!(err_text("\n\n").contains("empty"));
        assert!(err_text("vg_V,b_T,rxx_ohm\n").contains("header but no data"));
        assert!(err_text("vg_V,b_T,rxx_ohm").contains("header but no data"));
        assert!(err_text("# only a comment\nvg_V,b_T,rxx_ohm\n# end\n").contains("no data"));
    }

    #[test]
    fn missing_columns_list_what_was_found_and_needed() {
        let e = err_text("time_s,rxx_ohm\n0,1\n");
        assert!(e.contains("time_s, rxx_ohm"), "{e}");
        assert!(e.contains("gate"), "{e}");
        let e = err_text("vg_V,b_T\n0,1\n");
        assert!(e.contains("no data column"), "{e}");
        let dir = tempfile::tempdir().unwrap();
        let p = write(&dir, "m.csv", REGULAR);
        let opts = LoadOptions {
            columns: vec![(Role::Gate, "V1".into())],
            ..LoadOptions::default()
        };
        let e = load_map(&p, &opts, &NoProgress).unwrap_err().to_string();
        assert!(e.contains("`V1`") && e.contains("vg_V"), "{e}");
    }

    #[test]
    fn explicit_mapping_overrides_names() {
        let t = "V1,Bmag,R4pt,R_other\n0,1,5,7\n1,1,6,8\n";
        let dir = tempfile::tempdir().unwrap();
        let p = write(&dir, "m.csv", t);
        let opts = LoadOptions {
            columns: crate::io::columns::parse_mapping("gate=V1,field=Bmag,rxx=R4pt").unwrap(),
            ..LoadOptions::default()
        };
        let m = load_map(&p, &opts, &NoProgress).unwrap();
        assert_eq!(m.channel("rxx").unwrap().data[[0, 1]], 6.0);
        assert_eq!(m.channel("R_other").unwrap().data[[0, 0]], 7.0);
    }

    #[test]
    fn non_numeric_cell_names_line_column_and_text() {
        let t = REGULAR.replace("0,1.0,210,5", "0,1.0,2l0,5");
        let e = err_text(&t);
        assert!(e.contains("m.csv:6:"), "{e}");
        assert!(e.contains("rxx_ohm") && e.contains("`2l0`"), "{e}");
    }

    #[test]
    fn wrong_field_count_and_mixed_delimiters() {
        let t = REGULAR.replace("1,1.0,220,6", "1,1.0,220");
        let e = err_text(&t);
        assert!(
            e.contains(":7:") && e.contains("3 fields") && e.contains("has 4"),
            "{e}"
        );
        let t = REGULAR.replace("0,1.0,210,5", "0\t1.0\t210\t5");
        let e = err_text(&t);
        assert!(e.contains("mixed delimiters") && e.contains(":6:"), "{e}");
    }

    #[test]
    fn line_numbers_count_comments_blanks_and_quoted_cells() {
        // Lines 2–3 take the general path (comment, blank), line 5 too (quoted cell); the
        // duplicate on line 7 must still be reported on line 7.
        let t = "vg_V,b_T,rxx_ohm\n# cooled down\n\n0,1,10\n\"1\",1,20\n2,1,30\n2,1,31\n";
        let dir = tempfile::tempdir().unwrap();
        let p = write(&dir, "l.csv", t);
        let opts = LoadOptions {
            duplicates: DuplicatePolicy::Error,
            ..LoadOptions::default()
        };
        let e = load_map(&p, &opts, &NoProgress).unwrap_err().to_string();
        assert!(e.contains("line 7"), "{e}");
        let m = load_text(t).unwrap();
        let rxx = &m.channel("rxx").unwrap().data;
        assert_eq!((rxx[[0, 0]], rxx[[0, 1]], rxx[[0, 2]]), (10.0, 20.0, 30.5));
        let e = err_text("vg_V,b_T,rxx_ohm\n#\n0,1,10\n\n1,1,x\n");
        assert!(e.contains("m.csv:5:"), "{e}");
    }

    #[test]
    fn duplicate_points_average_or_error() {
        let t = format!("{REGULAR}0,1.0,230,5\n");
        // The repeated point (0 V, 1 T) comes after the sweep ended: a new sweep at the same
        // field, merged into one row by averaging.
        let m = load_text(&t).unwrap();
        let g = m.meta.gridding.clone().unwrap();
        assert_eq!(g.rows, 2);
        assert_eq!(g.rows_merged, 1);
        assert_eq!(m.channel("rxx").unwrap().data[[1, 1]], 220.0);
        // Within one sweep: a point measured twice.
        let t = "vg_V,b_T,rxx_ohm\n0,1,10\n1,1,20\n1,1,40\n2,1,50\n";
        let m = load_text(t).unwrap();
        assert_eq!(m.meta.gridding.as_ref().unwrap().duplicates_averaged, 1);
        assert_eq!(m.channel("rxx").unwrap().data[[0, 1]], 30.0);
        let dir = tempfile::tempdir().unwrap();
        let p = write(&dir, "d.csv", t);
        let opts = LoadOptions {
            duplicates: DuplicatePolicy::Error,
            ..LoadOptions::default()
        };
        let e = load_map(&p, &opts, &NoProgress).unwrap_err().to_string();
        assert!(
            e.contains("d.csv") && e.contains("duplicate") && e.contains("line 4"),
            "{e}"
        );
    }

    #[test]
    fn directories_and_missing_paths() {
        let dir = tempfile::tempdir().unwrap();
        let e = load_map(dir.path(), &LoadOptions::default(), &NoProgress)
            .unwrap_err()
            .to_string();
        assert!(e.contains("is a directory"), "{e}");
        let e = load_map(
            &dir.path().join("nope.csv"),
            &LoadOptions::default(),
            &NoProgress,
        )
        .unwrap_err()
        .to_string();
        assert!(e.contains("nope.csv"), "{e}");
    }

    #[test]
    fn unit_that_does_not_fit_is_refused() {
        let e = err_text("vg_V,b_T,rxx_V\n0,1,2\n");
        assert!(e.contains("rxx_V"), "{e}");
    }

    #[test]
    fn temperature_column_is_recorded() {
        let t = "vg_V,b_T,T_K,rxx_ohm\n0,1,1.5,5\n1,1,1.7,6\n";
        let m = load_text(t).unwrap();
        assert!((m.meta.temperature_k.unwrap() - 1.6).abs() < 1e-12);
        assert!(m.channel("rxx").is_some());
    }

    #[test]
    fn blocks_split_anywhere_parse_the_same() {
        // A file larger than the two-way split threshold, so pieces and line counts are used.
        let mut t = String::from("vg_V,b_T,rxx_ohm\n");
        for j in 0..40 {
            for i in 0..2000 {
                t.push_str(&format!(
                    "{},{},{}\n",
                    i as f64 * 0.01,
                    j as f64 * 0.25,
                    i + j
                ));
            }
        }
        let m = load_text(&t).unwrap();
        assert_eq!(m.shape(), (40, 2000));
        assert_eq!(m.channel("rxx").unwrap().data[[39, 1999]], 2038.0);
        let bad = t.replacen("1999", "19x9", 1);
        let e = load_text(&bad).unwrap_err().to_string();
        // The first "1999" is in the rxx column of line (1 + 1999 + 1) = 2001.
        assert!(e.contains(":2001:"), "{e}");
    }

    /// One block, one chunk: the sequential parse the blocked one must equal.
    const WHOLE: Blocking = Blocking {
        block: 1 << 30,
        chunks: 1,
        min_chunk: 1,
    };

    /// A file of `text` to parse with several blockings.
    struct TestFile {
        _dir: tempfile::TempDir,
        path: PathBuf,
    }

    impl TestFile {
        fn new(text: &str) -> TestFile {
            let dir = tempfile::tempdir().unwrap();
            let path = write(&dir, "m.csv", text);
            TestFile { _dir: dir, path }
        }

        fn points(&self, blocking: Blocking) -> Result<FilePoints> {
            read_points_in(&self.path, &LoadOptions::default(), &NoProgress, blocking)
        }
    }

    fn points_in(text: &str, blocking: Blocking) -> Result<FilePoints> {
        TestFile::new(text).points(blocking)
    }

    /// Everything a parse gives, as text for comparing two parses: values as bit patterns
    /// (missing values are NaN, which never equals itself).
    fn summary(p: &FilePoints) -> String {
        let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<u64>>();
        let mut values = vec![bits(&p.flat.swept)];
        values.extend(p.flat.values.iter().map(|v| bits(v)));
        format!(
            "{values:?} {:?} {} {:?} {:?}",
            p.flat.spans,
            p.swept_on_x,
            p.columns,
            p.temperature_k.map(f64::to_bits)
        )
    }

    /// A deterministic xorshift generator for test files.
    struct Rng(u64);

    impl Rng {
        fn below(&mut self, n: u64) -> u64 {
            self.0 ^= self.0 << 13;
            self.0 ^= self.0 >> 7;
            self.0 ^= self.0 << 17;
            self.0 % n
        }
    }

    /// A gate-fastest file with the awkward cases mixed in: comments, blank lines, CRLF line
    /// ends, quoted and empty cells, a reversed sweep, a temperature column, and (sometimes) no
    /// line end at the end. Returns the text and the 1-based line number of every data row.
    fn awkward_file(rng: &mut Rng) -> (String, Vec<usize>) {
        let mut t = String::from("# cooldown 2\nvg_V,b_T,T_K,rxx_ohm,rxy_ohm\n");
        for j in 0..12 {
            let reversed = j == 5;
            for i in 0..9 {
                let i = if reversed { 8 - i } else { i };
                match rng.below(12) {
                    0 => t.push_str("# note\n"),
                    1 => t.push_str("\r\n"),
                    _ => {}
                }
                let eol = if rng.below(3) == 0 { "\r\n" } else { "\n" };
                let rxx = match rng.below(10) {
                    0 => String::new(),
                    1 => format!("\"{}.5\"", 100 + i + j),
                    _ => format!("{}.25e-1", 1000 + 37 * i + j),
                };
                t.push_str(&format!(
                    "{},{}, 1.{}5,{rxx},-{}.125{eol}",
                    i as f64 * 0.5 - 2.0,
                    j as f64 * 0.125,
                    rng.below(10),
                    i * j
                ));
            }
        }
        // Line numbers: the data rows are the lines after the header that are neither blank
        // nor comments.
        let numbers: Vec<usize> = t
            .split('\n')
            .enumerate()
            .filter(|(k, l)| {
                let l = l.trim_end_matches('\r');
                *k >= 2 && !l.is_empty() && !l.starts_with('#')
            })
            .map(|(k, _)| k + 1)
            .collect();
        assert_eq!(numbers.len(), 108);
        if rng.below(2) == 0 {
            t.pop();
            if t.ends_with('\r') {
                t.pop();
            }
        }
        (t, numbers)
    }

    fn random_blocking(rng: &mut Rng) -> Blocking {
        Blocking {
            block: 64 + rng.below(400) as usize,
            chunks: 1 + rng.below(9) as usize,
            min_chunk: 1 + rng.below(80) as usize,
        }
    }

    #[test]
    fn any_blocking_parses_like_one_sequential_pass() {
        let mut rng = Rng(0x9e37_79b9_7f4a_7c15);
        for _ in 0..40 {
            let (text, _) = awkward_file(&mut rng);
            let file = TestFile::new(&text);
            let whole = file.points(WHOLE).unwrap();
            assert_eq!(whole.len(), 108);
            assert_eq!(whole.flat.spans.len(), 12);
            assert!(whole.temperature_k.is_some());
            for _ in 0..6 {
                let b = random_blocking(&mut rng);
                let got = file.points(b).unwrap();
                assert_eq!(summary(&got), summary(&whole), "{b:?}\n{text}");
            }
        }
    }

    #[test]
    fn a_bad_cell_anywhere_names_its_own_line_for_any_blocking() {
        let mut rng = Rng(0x2545_f491_4f6c_dd1d);
        for _ in 0..40 {
            let (text, numbers) = awkward_file(&mut rng);
            // Spoil the rxy cell of one data row.
            let k = rng.below(numbers.len() as u64) as usize;
            let line = numbers[k];
            let spoilt: Vec<String> = text
                .split('\n')
                .enumerate()
                .map(|(i, l)| {
                    if i + 1 == line {
                        let at = l.rfind(".125").unwrap();
                        format!("{}.1x5{}", &l[..at], &l[at + 4..])
                    } else {
                        l.to_string()
                    }
                })
                .collect();
            let file = TestFile::new(&spoilt.join("\n"));
            let want = file.points(WHOLE).err().unwrap().to_string();
            assert!(
                want.contains(&format!("m.csv:{line}:")) && want.contains("rxy_ohm"),
                "{want}"
            );
            for _ in 0..4 {
                let b = random_blocking(&mut rng);
                let e = file.points(b).err().unwrap().to_string();
                assert_eq!(e, want, "{b:?}");
            }
        }
    }

    #[test]
    fn an_error_in_the_middle_of_the_second_chunk_is_numbered_from_the_file_start() {
        let mut t = String::from("vg_V,b_T,rxx_ohm\n");
        for j in 0..4 {
            for i in 0..100 {
                t.push_str(&format!("{i},{j},{}\n", i * j));
            }
        }
        // Line 1 is the header; data row r (0-based) is on line r + 2. Row 150 is in the
        // middle of the second of four chunks.
        let t = t.replacen("50,1,50\n", "50,1,5;0\n", 1);
        let four = Blocking {
            block: 1 << 20,
            chunks: 4,
            min_chunk: 1,
        };
        let e = points_in(&t, four).err().unwrap().to_string();
        assert!(
            e.contains("m.csv:152:") && e.contains("mixed delimiters"),
            "{e}"
        );
        let t = t.replacen("5;0", "5x0", 1);
        let e = points_in(&t, four).err().unwrap().to_string();
        assert!(e.contains("m.csv:152:") && e.contains("`5x0`"), "{e}");
    }

    #[test]
    fn a_duplicate_point_is_reported_on_its_line_across_blocks() {
        let mut t = String::from("vg_V,b_T,rxx_ohm\n# a comment\n\n");
        for i in 0..60 {
            t.push_str(&format!("{i},1,{i}\r\n"));
        }
        t.push_str("59,1,7");
        let dir = tempfile::tempdir().unwrap();
        let p = write(&dir, "d.csv", &t);
        let opts = LoadOptions {
            duplicates: DuplicatePolicy::Error,
            ..LoadOptions::default()
        };
        let mut rng = Rng(77);
        for _ in 0..10 {
            let b = random_blocking(&mut rng);
            let pts = read_points_in(&p, &opts, &NoProgress, b).unwrap();
            let e = grid_flat(
                pts.set,
                pts.flat,
                pts.swept_on_x,
                &opts.grid,
                opts.duplicates,
            )
            .map_err(|e| with_path(e, &p))
            .unwrap_err()
            .to_string();
            // Header on line 1, two skipped lines, 60 rows on lines 4–63, the repeat on 64.
            assert!(e.contains("line 64"), "{b:?}: {e}");
        }
    }
}

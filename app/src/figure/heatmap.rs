//! Heat-map colouring and resampling: the value range (fixed or from percentiles), the
//! value → colour-table position for linear, log and symmetric-log scales, and the RGBA image
//! of a map over any data window at any pixel size (nearest or bilinear in the values, on
//! non-uniform grids). The raster backend samples at device resolution, the SVG backend at the
//! data's own resolution.

use super::scene::{ColorScale, HeatMap, Resample, ValueRange};
use crate::rows::par_rows_vec;
use fanmark_core::{Error, Result};

/// A resolved value → colour mapping.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ColorMapping {
    /// Value at the low end of the colour table.
    pub lo: f64,
    /// Value at the high end.
    pub hi: f64,
    /// Scale between them.
    pub scale: ColorScale,
}

fn forward(scale: ColorScale, v: f64) -> f64 {
    match scale {
        ColorScale::Linear => v,
        ColorScale::Log => {
            if v > 0.0 {
                v.ln()
            } else {
                f64::NAN
            }
        }
        ColorScale::SymLog { linear_threshold } => {
            v.signum() * (v.abs() / linear_threshold).ln_1p()
        }
    }
}

impl ColorMapping {
    /// Position 0…1 (clamped) of `v` along the colour table; `None` for NaN or a value the scale
    /// cannot show (≤ 0 on a log scale).
    pub fn position(&self, v: f64) -> Option<f64> {
        let f = forward(self.scale, v);
        if !f.is_finite() {
            return None;
        }
        let (a, b) = (forward(self.scale, self.lo), forward(self.scale, self.hi));
        Some(((f - a) / (b - a)).clamp(0.0, 1.0))
    }

    /// Colour-table index 0…255 of `v`.
    pub fn index(&self, v: f64) -> Option<u8> {
        self.position(v).map(table_index)
    }
}

/// Values → opaque RGBA pixels through a colour table, for use per pixel: the colour of
/// [`ColorMapping::index`] with the scale's ends transformed once, and the missing colour where
/// that gives no index (or an index past the table). The same colours, without a branch on the
/// value in the linear scale.
struct Painter {
    /// Transformed low end and span of the scale.
    a: f64,
    span: f64,
    scale: ColorScale,
    /// The table's colours (opaque), then the missing colour at [`Painter::MISSING`].
    table: [[u8; 4]; 257],
}

impl Painter {
    /// Index of the missing colour in the table.
    const MISSING: usize = 256;

    fn new(map: &ColorMapping, colors: &[[u8; 3]], missing: [u8; 4]) -> Painter {
        let (a, b) = (forward(map.scale, map.lo), forward(map.scale, map.hi));
        let mut table = [missing; 257];
        for (t, c) in table.iter_mut().zip(colors.iter().take(256)) {
            *t = [c[0], c[1], c[2], 255];
        }
        Painter {
            a,
            span: b - a,
            scale: map.scale,
            table,
        }
    }

    /// The pixel of value `v`.
    #[inline(always)]
    fn paint(&self, v: f64) -> [u8; 4] {
        let f = match self.scale {
            ColorScale::Linear => v,
            s => forward(s, v),
        };
        // As `table_index` of the clamped position; a NaN position gives 0 here and is sent
        // to the missing colour below with the infinities.
        let x = ((f - self.a) / self.span).clamp(0.0, 1.0) * 255.0;
        let i = if x < 0.5 { 0 } else { (x + 0.5) as usize };
        let i = if f.is_finite() { i } else { Self::MISSING };
        self.table[i.min(Self::MISSING)]
    }
}

/// The colour-table index of position `t` ∈ [0, 1]: t · 255 rounded as `f64::round` does.
fn table_index(t: f64) -> u8 {
    round_to_u8(t * 255.0)
}

/// `x` ∈ [0, 255] rounded half away from zero, as `f64::round` gives it, without the library
/// call: for x ≥ ½, x + ½ never rounds up past an integer, so truncating it rounds; below ½
/// (where x + ½ can round up to 1) the answer is 0.
fn round_to_u8(x: f64) -> u8 {
    if x < 0.5 {
        0
    } else {
        (x + 0.5) as u8
    }
}

/// Check the heat map's shape, coordinates and colour table.
pub fn validate(h: &HeatMap) -> Result<()> {
    let (ny, nx) = h.values.dim();
    if h.x.len() != nx || h.y.len() != ny {
        return Err(Error::invalid(
            "heat map",
            format!(
                "values are {ny}×{nx} (rows×columns) but there are {} x and {} y coordinates",
                h.x.len(),
                h.y.len()
            ),
        ));
    }
    for (name, c) in [("x", &h.x), ("y", &h.y)] {
        if c.len() < 2 {
            return Err(Error::invalid(
                format!("heat map {name} coordinates"),
                "need at least 2 points",
            ));
        }
        let up = c[1] > c[0];
        let ok = c.iter().all(|v| v.is_finite())
            && c.windows(2)
                .all(|w| if up { w[1] > w[0] } else { w[1] < w[0] });
        if !ok {
            return Err(Error::invalid(
                format!("heat map {name} coordinates"),
                "expected finite, strictly monotone values",
            ));
        }
    }
    if h.colors.len() != 256 {
        return Err(Error::invalid(
            "heat map colour table",
            format!("expected 256 entries, got {}", h.colors.len()),
        ));
    }
    if let ColorScale::SymLog { linear_threshold } = h.scale {
        if linear_threshold.is_nan() || linear_threshold <= 0.0 || !linear_threshold.is_finite() {
            return Err(Error::invalid(
                "symmetric-log scale",
                format!("linear threshold must be positive, got {linear_threshold}"),
            ));
        }
    }
    Ok(())
}

/// Resolve the colour range of a heat map.
pub fn resolve_mapping(h: &HeatMap) -> Result<ColorMapping> {
    let usable = |v: f64| v.is_finite() && (h.scale != ColorScale::Log || v > 0.0);
    let (mut lo, mut hi) = match h.range {
        ValueRange::Fixed(a, b) => {
            if !usable(a) || !usable(b) {
                return Err(Error::invalid(
                    "colour range",
                    format!("limits {a}, {b} cannot be shown on this scale"),
                ));
            }
            (a.min(b), a.max(b))
        }
        ValueRange::Percentile(pa, pb) => {
            if !(0.0..=100.0).contains(&pa) || !(0.0..=100.0).contains(&pb) || pa >= pb {
                return Err(Error::invalid(
                    "colour range percentiles",
                    format!("expected 0 ≤ lower < upper ≤ 100, got {pa}, {pb}"),
                ));
            }
            let mut v: Vec<f64> = h.values.iter().copied().filter(|&v| usable(v)).collect();
            if v.is_empty() {
                return Err(Error::invalid(
                    "heat map",
                    "no values that the colour scale can show",
                ));
            }
            (percentile(&mut v, pa), percentile(&mut v, pb))
        }
    };
    if lo == hi {
        if h.scale == ColorScale::Log {
            lo /= 2.0;
            hi *= 2.0;
        } else {
            let d = if lo == 0.0 { 1.0 } else { lo.abs() * 0.5 };
            lo -= d;
            hi += d;
        }
    }
    Ok(ColorMapping {
        lo,
        hi,
        scale: h.scale,
    })
}

/// Percentile `p` (0…100) of the values, interpolated linearly between ranks (the values are
/// reordered; no full sort).
fn percentile(v: &mut [f64], p: f64) -> f64 {
    let r = p / 100.0 * (v.len() - 1) as f64;
    let i = r.floor() as usize;
    let (_, &mut a, rest) = v.select_nth_unstable_by(i, f64::total_cmp);
    let b = rest.iter().copied().min_by(f64::total_cmp).unwrap_or(a);
    a + (b - a) * (r - i as f64)
}

/// Number of equal pixels that show the cells between `edges` along `coords` at the data's own
/// resolution: the cell count on a uniform grid, enough for the narrowest cell otherwise (at
/// most 4096).
pub fn pixels_for_cells(coords: &[f64], first: usize, last: usize, edges: (f64, f64)) -> u32 {
    let count = (last - first + 1) as u32;
    let steps: Vec<f64> = coords.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
    let (lo, hi) = steps
        .iter()
        .fold((f64::MAX, 0.0f64), |(a, b), &s| (a.min(s), b.max(s)));
    if hi <= lo * (1.0 + 1e-6) {
        count
    } else {
        let n = ((edges.1 - edges.0).abs() / lo).ceil();
        (n.min(4096.0) as u32).max(count)
    }
}

/// Where an output sample falls in one coordinate vector: indices of the two bracketing points
/// and the weight of the second; for nearest sampling the weight is 0 and both are the nearest.
type AxisSample = Option<(usize, usize, f64)>;

/// Sample positions `pos` along monotone `coords`. Points beyond the outer cell edges (half a
/// spacing past the first and last point) give `None`.
fn axis_samples(coords: &[f64], pos: impl Iterator<Item = f64>, mode: Resample) -> Vec<AxisSample> {
    let n = coords.len();
    let s = if coords[n - 1] > coords[0] { 1.0 } else { -1.0 };
    let key: Vec<f64> = coords.iter().map(|c| c * s).collect();
    let lo_edge = key[0] - (key[1] - key[0]) / 2.0;
    let hi_edge = key[n - 1] + (key[n - 1] - key[n - 2]) / 2.0;
    pos.map(|p| {
        let k = p * s;
        if !(k >= lo_edge && k <= hi_edge) {
            return None;
        }
        // Index of the first key > k.
        let i = key.partition_point(|&c| c <= k);
        let (a, b) = if i == 0 {
            (0, 0)
        } else if i >= n {
            (n - 1, n - 1)
        } else {
            (i - 1, i)
        };
        let w = if a == b {
            0.0
        } else {
            (k - key[a]) / (key[b] - key[a])
        };
        Some(match mode {
            Resample::Bilinear => (a, b, w),
            Resample::Nearest => {
                let m = if w < 0.5 { a } else { b };
                (m, m, 0.0)
            }
        })
    })
    .collect()
}

/// RGBA image (straight alpha, row-major, top row first) of the heat map over the data window
/// whose left/right edges are `x_edges` and top/bottom edges `y_edges`, `width`×`height` pixels.
/// Pixel centres are sampled; missing data is transparent unless a missing colour is set.
pub fn render_rgba(
    h: &HeatMap,
    map: &ColorMapping,
    x_edges: (f64, f64),
    y_edges: (f64, f64),
    width: u32,
    height: u32,
) -> Vec<u8> {
    let (w, ht) = (width as usize, height as usize);
    if w == 0 || ht == 0 {
        return Vec::new();
    }
    let at = |e: (f64, f64), n: usize, i: usize| e.0 + (i as f64 + 0.5) / n as f64 * (e.1 - e.0);
    let xs = axis_samples(&h.x, (0..w).map(|i| at(x_edges, w, i)), h.resample);
    let ys = axis_samples(&h.y, (0..ht).map(|i| at(y_edges, ht, i)), h.resample);
    let missing = h.missing.map(|c| [c[0], c[1], c[2], 255]).unwrap_or([0; 4]);
    let painter = Painter::new(map, &h.colors, missing);
    let colour = |value: f64| painter.paint(value);
    // Row-major values, so that each output row reads its source rows as slices.
    let v = h.values.as_standard_layout();
    let Some(flat) = v.as_slice() else {
        return vec![0; w * ht * 4];
    };
    let nx = v.dim().1;
    // Pixels outside the data are transparent.
    const CLEAR: [u8; 4] = [0; 4];
    let pixels = match h.resample {
        Resample::Nearest => {
            // Nearest: both bracketing points are the nearest one; its column is the same for
            // every row.
            let cols: Vec<Option<usize>> = xs.iter().map(|x| x.map(|(xa, _, _)| xa)).collect();
            // When every pixel has a column and they run on one by one (the samples are at
            // the pixels, as in the viewer), a row is a straight run of its source row.
            let first = cols.first().copied().flatten();
            let run = first.filter(|&c0| {
                c0 + w <= nx && cols.iter().enumerate().all(|(i, c)| *c == Some(c0 + i))
            });
            par_rows_vec(ht, w, CLEAR, |r, out| {
                let Some((ya, _, _)) = ys[r] else {
                    return;
                };
                let src = &flat[ya * nx..(ya + 1) * nx];
                if let Some(c0) = run {
                    out.extend(src[c0..c0 + w].iter().map(|&v| colour(v)));
                    return;
                }
                out.extend(cols.iter().map(|col| col.map_or(CLEAR, |c| colour(src[c]))));
            })
        }
        Resample::Bilinear => par_rows_vec(ht, w, CLEAR, |r, out| {
            let Some((ya, yb, wy)) = ys[r] else {
                return;
            };
            let (ra, rb) = (&flat[ya * nx..(ya + 1) * nx], &flat[yb * nx..(yb + 1) * nx]);
            for xsample in &xs {
                let Some((xa, xb, wx)) = *xsample else {
                    out.push(CLEAR);
                    continue;
                };
                let q = [
                    (ra[xa], (1.0 - wy) * (1.0 - wx)),
                    (ra[xb], (1.0 - wy) * wx),
                    (rb[xa], wy * (1.0 - wx)),
                    (rb[xb], wy * wx),
                ];
                let value = if q.iter().all(|(val, _)| val.is_finite()) {
                    q.iter().map(|(val, wt)| val * wt).sum()
                } else {
                    // Near missing data: the heaviest finite neighbour.
                    q.iter()
                        .filter(|(val, _)| val.is_finite())
                        .max_by(|a, b| a.1.total_cmp(&b.1))
                        .map(|(val, _)| *val)
                        .unwrap_or(f64::NAN)
                };
                out.push(colour(value));
            }
        }),
    };
    pixels.into_flattened()
}

/// The data window covering whole cells of the points visible in `range` (from, to) along
/// `coords`: (first index, last index, edge at the first, edge at the last), edges half a
/// spacing beyond the points. `None` when no point is visible.
pub fn visible_cells(coords: &[f64], range: (f64, f64)) -> Option<(usize, usize, f64, f64)> {
    let n = coords.len();
    let (lo, hi) = (range.0.min(range.1), range.0.max(range.1));
    let edge = |i: usize, dir: f64| {
        let j = if i + 1 < n { i + 1 } else { i - 1 };
        let half = (coords[j] - coords[i]).abs() / 2.0;
        coords[i] + dir * half
    };
    let vis: Vec<usize> = (0..n)
        .filter(|&i| {
            let (a, b) = (edge(i, -1.0), edge(i, 1.0));
            b > lo && a < hi
        })
        .collect();
    let (&i0, &i1) = (vis.first()?, vis.last()?);
    let up = coords[n - 1] > coords[0];
    let d = if up { 1.0 } else { -1.0 };
    Some((i0, i1, edge(i0, -d), edge(i1, d)))
}

#[cfg(test)]
mod tests {
    use super::*;
    use ndarray::Array2;

    fn grey() -> Vec<[u8; 3]> {
        (0..256).map(|i| [i as u8; 3]).collect()
    }

    fn map(values: Array2<f64>, x: Vec<f64>, y: Vec<f64>, resample: Resample) -> HeatMap {
        HeatMap {
            values,
            x,
            y,
            colors: grey(),
            scale: ColorScale::Linear,
            range: ValueRange::Fixed(0.0, 1.0),
            resample,
            missing: None,
        }
    }

    #[test]
    fn scales_put_values_where_expected() {
        let lin = ColorMapping {
            lo: 0.0,
            hi: 10.0,
            scale: ColorScale::Linear,
        };
        assert_eq!(lin.position(2.5), Some(0.25));
        assert_eq!(lin.position(-4.0), Some(0.0));
        assert_eq!(lin.position(f64::NAN), None);
        let log = ColorMapping {
            lo: 1.0,
            hi: 1e4,
            scale: ColorScale::Log,
        };
        assert!((log.position(100.0).unwrap() - 0.5).abs() < 1e-12);
        assert_eq!(log.position(0.0), None);
        let sym = ColorMapping {
            lo: -100.0,
            hi: 100.0,
            scale: ColorScale::SymLog {
                linear_threshold: 1.0,
            },
        };
        assert!((sym.position(0.0).unwrap() - 0.5).abs() < 1e-12);
        let p = sym.position(10.0).unwrap();
        let m = sym.position(-10.0).unwrap();
        assert!((p + m - 1.0).abs() < 1e-12);
        // ln(1+10)/ln(1+100) of the half range above the middle.
        assert!((p - (0.5 + 0.5 * 11f64.ln() / 101f64.ln())).abs() < 1e-12);
    }

    #[test]
    fn the_per_pixel_painter_gives_the_colour_of_the_mapping_index() {
        // A 200-colour table (indices past it are missing) on every scale, over values that
        // hit both ends, the half-way points of the table, NaN, the infinities and, on the
        // log scale, values it cannot show.
        let colors: Vec<[u8; 3]> = (0..200).map(|i| [i as u8, 255 - i as u8, 7]).collect();
        let missing = [1, 2, 3, 255];
        let scales = [
            ColorScale::Linear,
            ColorScale::Log,
            ColorScale::SymLog {
                linear_threshold: 0.3,
            },
        ];
        for scale in scales {
            let m = ColorMapping {
                lo: 0.01,
                hi: 7.5,
                scale,
            };
            let p = Painter::new(&m, &colors, missing);
            let mut values: Vec<f64> = (-400..=2400).map(|k| k as f64 * 0.0037).collect();
            values.extend((0..=255).map(|k| 0.01 + (k as f64 + 0.5) / 255.0 * 7.49));
            values.extend([
                f64::NAN,
                f64::INFINITY,
                f64::NEG_INFINITY,
                0.0,
                -1.0,
                0.01,
                7.5,
            ]);
            for v in values {
                let want = match m.index(v) {
                    Some(i) if (i as usize) < colors.len() => {
                        let c = colors[i as usize];
                        [c[0], c[1], c[2], 255]
                    }
                    _ => missing,
                };
                assert_eq!(p.paint(v), want, "{scale:?} at {v}");
            }
        }
    }

    #[test]
    fn table_index_rounds_as_f64_round_does() {
        // Every half-way point and its float neighbours, and a dense sweep of [0, 1].
        // Positive floats two units in the last place either side of `x`, and `x`.
        let around =
            |x: f64| (-2i64..=2).map(move |d| f64::from_bits((x.to_bits() as i64 + d) as u64));
        let mut ts: Vec<f64> = (0..=255)
            .flat_map(|k| around((k as f64 + 0.5) / 255.0))
            .collect();
        ts.extend((0..=100_000).map(|i| i as f64 / 100_000.0));
        ts.extend([0.0, 1.0]);
        // The largest float below ½, where x + ½ rounds up to 1, and its neighbours.
        for x in around(0.49999999999999994) {
            assert_eq!(round_to_u8(x), x.round() as u8, "x = {x:e}");
        }
        assert_eq!(round_to_u8(0.49999999999999994), 0);
        let mut halves = 0;
        for t in ts.into_iter().map(|t| t.clamp(0.0, 1.0)) {
            let want = (t * 255.0).round() as u8;
            assert_eq!(table_index(t), want, "t = {t:e}");
            halves += ((t * 255.0).fract() == 0.5) as usize;
        }
        assert!(halves > 100, "{halves} exact half-way points checked");
    }

    #[test]
    fn percentiles_clip_outliers() {
        let mut v = Array2::from_shape_fn((10, 10), |(i, j)| (i * 10 + j) as f64);
        v[[0, 0]] = -1e9;
        v[[9, 9]] = 1e9;
        v[[5, 5]] = f64::NAN;
        let mut h = map(
            v,
            (0..10).map(f64::from).collect(),
            (0..10).map(f64::from).collect(),
            Resample::Nearest,
        );
        h.range = ValueRange::Percentile(2.0, 98.0);
        let m = resolve_mapping(&h).unwrap();
        assert!(m.lo > 0.0 && m.lo < 5.0, "{m:?}");
        assert!(m.hi > 94.0 && m.hi < 99.0, "{m:?}");
        h.range = ValueRange::Percentile(50.0, 10.0);
        assert!(resolve_mapping(&h).is_err());
    }

    #[test]
    fn nearest_and_bilinear_sampling_on_a_non_uniform_grid() {
        // Two columns at x = 0 and x = 3, values 0 and 1; rows identical.
        let v = Array2::from_shape_fn((2, 2), |(_, j)| j as f64);
        let h = map(
            v.clone(),
            vec![0.0, 3.0],
            vec![0.0, 1.0],
            Resample::Bilinear,
        );
        let m = resolve_mapping(&h).unwrap();
        // Four pixel centres at x = 0, 1, 2, 3 (window −0.5 … 3.5).
        let img = render_rgba(&h, &m, (-0.5, 3.5), (1.0, 0.0), 4, 1);
        let reds: Vec<u8> = img.chunks(4).map(|p| p[0]).collect();
        assert_eq!(reds, vec![0, 85, 170, 255]);
        let hn = map(v, vec![0.0, 3.0], vec![0.0, 1.0], Resample::Nearest);
        let img = render_rgba(&hn, &m, (-0.5, 3.5), (1.0, 0.0), 4, 1);
        let reds: Vec<u8> = img.chunks(4).map(|p| p[0]).collect();
        assert_eq!(reds, vec![0, 0, 255, 255]);
        // Outside the outer cells (beyond x = 4.5) is transparent.
        let img = render_rgba(&hn, &m, (4.6, 5.0), (1.0, 0.0), 1, 1);
        assert_eq!(img[3], 0);
    }

    #[test]
    fn decreasing_coordinates_and_missing_values() {
        let v = Array2::from_shape_vec((1, 3), vec![0.0, f64::NAN, 1.0]).unwrap();
        let mut h = map(v, vec![2.0, 1.0, 0.0], vec![0.0, 1.0], Resample::Nearest);
        // One row only is invalid.
        assert!(validate(&h).is_err());
        h.values =
            Array2::from_shape_vec((2, 3), vec![0.0, f64::NAN, 1.0, 0.0, f64::NAN, 1.0]).unwrap();
        validate(&h).unwrap();
        h.missing = Some([255, 0, 0]);
        let m = resolve_mapping(&h).unwrap();
        // Left to right in x: x = 0 holds 1.0 (white), x = 1 missing (red), x = 2 holds 0.0.
        let img = render_rgba(&h, &m, (-0.5, 2.5), (1.0, 0.0), 3, 1);
        assert_eq!(&img[0..4], &[255, 255, 255, 255]);
        assert_eq!(&img[4..8], &[255, 0, 0, 255]);
        assert_eq!(&img[8..12], &[0, 0, 0, 255]);
        h.colors.pop();
        assert!(validate(&h).is_err());
    }

    #[test]
    fn data_resolution_follows_the_narrowest_cell() {
        let uniform: Vec<f64> = (0..10).map(f64::from).collect();
        assert_eq!(pixels_for_cells(&uniform, 2, 6, (1.5, 6.5)), 5);
        // Spacings 1 and 0.25: a 2.5-wide window needs 10 pixels of 0.25.
        let mixed = [0.0, 1.0, 2.0, 2.25, 2.5];
        assert_eq!(pixels_for_cells(&mixed, 0, 4, (-0.5, 2.0)), 10);
    }

    #[test]
    fn percentile_interpolates_between_ranks() {
        let mut v = vec![5.0, 1.0, 4.0, 2.0, 3.0];
        assert_eq!(percentile(&mut v, 0.0), 1.0);
        assert_eq!(percentile(&mut v, 100.0), 5.0);
        assert_eq!(percentile(&mut v, 50.0), 3.0);
        assert!((percentile(&mut v, 10.0) - 1.4).abs() < 1e-12);
    }

    #[test]
    fn visible_cells_cover_whole_cells() {
        let x: Vec<f64> = (0..10).map(f64::from).collect();
        assert_eq!(visible_cells(&x, (2.2, 5.7)), Some((2, 6, 1.5, 6.5)));
        assert_eq!(visible_cells(&x, (-5.0, 20.0)), Some((0, 9, -0.5, 9.5)));
        assert_eq!(visible_cells(&x, (20.0, 30.0)), None);
    }
}

//! Level-of-detail pyramid of a channel: level 0 is the map grid, each further level averages
//! 2 × 2 cells of the one below (ignoring NaN). A view samples the coarsest level that still has
//! at least one cell per output pixel, so a redraw costs the same on a 10⁸-point map as on a
//! small one.

use super::data::bilinear;
use crate::rows::par_rows_vec;
use ndarray::Array2;
use rayon::prelude::*;

/// One level of the pyramid.
#[derive(Debug)]
pub struct Level {
    /// Values, shape (rows, columns); cell (i, j) covers level-0 cells i·2ᵏ…(i+1)·2ᵏ − 1.
    pub values: Array2<f64>,
    /// 2ᵏ: level-0 cells per cell of this level along each axis.
    pub factor: usize,
}

/// The pyramid of one channel.
#[derive(Debug)]
pub struct Pyramid {
    /// Levels, finest first.
    pub levels: Vec<Level>,
}

fn halve(a: &Array2<f64>) -> Array2<f64> {
    let (ny, nx) = a.dim();
    let (my, mx) = (ny.div_ceil(2), nx.div_ceil(2));
    let rows: Vec<Vec<f64>> = (0..my)
        .into_par_iter()
        .map(|i| {
            (0..mx)
                .map(|j| {
                    let (mut s, mut n) = (0.0, 0u32);
                    for di in 0..2 {
                        for dj in 0..2 {
                            let (r, c) = (2 * i + di, 2 * j + dj);
                            if r < ny && c < nx {
                                let v = a[[r, c]];
                                if v.is_finite() {
                                    s += v;
                                    n += 1;
                                }
                            }
                        }
                    }
                    if n == 0 {
                        f64::NAN
                    } else {
                        s / n as f64
                    }
                })
                .collect()
        })
        .collect();
    Array2::from_shape_fn((my, mx), |(i, j)| rows[i][j])
}

impl Pyramid {
    /// Build levels until the coarsest has at most 512 cells along its longer side.
    pub fn new(values: Array2<f64>) -> Pyramid {
        // Row-major storage lets a sampler read whole rows as slices.
        let values = if values.is_standard_layout() {
            values
        } else {
            values.as_standard_layout().into_owned()
        };
        let mut levels = vec![Level { values, factor: 1 }];
        loop {
            let last = levels.last().expect("at least level 0");
            let (ny, nx) = last.values.dim();
            if ny.max(nx) <= 512 || ny < 2 || nx < 2 {
                break;
            }
            let next = Level {
                values: halve(&last.values),
                factor: last.factor * 2,
            };
            levels.push(next);
        }
        Pyramid { levels }
    }

    /// The coarsest level with at most `cells_per_pixel` ≥ 1 level-0 cells per level cell
    /// (the level whose cells are no larger than one output pixel).
    pub fn level_for(&self, cells_per_pixel: f64) -> &Level {
        let mut best = &self.levels[0];
        for l in &self.levels {
            if (l.factor as f64) <= cells_per_pixel.max(1.0) {
                best = l;
            }
        }
        best
    }

    /// Sample a `width`×`height` grid (row 0 at the top): `at(column, row)` gives the level-0
    /// fractional (column, row) index of each output sample, or `None` outside the data;
    /// `cells_per_pixel` chooses the level. NaN where there is no data.
    pub fn sample(
        &self,
        width: usize,
        height: usize,
        cells_per_pixel: f64,
        at: &(dyn Fn(usize, usize) -> Option<(f64, f64)> + Sync),
    ) -> Array2<f64> {
        let level = self.level_for(cells_per_pixel);
        let f = level.factor as f64;
        let off = (f - 1.0) / 2.0;
        let (ny, nx) = level.values.dim();
        let mut rows = vec![f64::NAN; width * height];
        // Rows are independent: each worker fills whole rows of the preallocated output.
        rows.par_chunks_mut(width.max(1))
            .enumerate()
            .for_each(|(r, row)| {
                for (c, out) in row.iter_mut().enumerate() {
                    if let Some((fx, fy)) = at(c, r) {
                        let a = ((fx - off) / f).clamp(0.0, (nx - 1) as f64);
                        let b = ((fy - off) / f).clamp(0.0, (ny - 1) as f64);
                        *out = bilinear(&level.values, a, b);
                    }
                }
            });
        Array2::from_shape_vec((height, width), rows).expect("width × height samples")
    }

    /// Sample the grid whose sample (c, r) sits at level-0 fractional (column, row) index
    /// (`cols[c]`, `rows[r]`) — positions that are the same down a column and along a row —
    /// each value multiplied by `factor`; `cells_per_pixel` chooses the level. Row-major,
    /// `rows.len()` × `cols.len()`; NaN where a position is `None`. Equal to [`Self::sample`]
    /// with `at(c, r) = (cols[c]?, rows[r]?)` times `factor`, but each column's cell index and
    /// weight is found once instead of once per sample.
    pub fn sample_separable(
        &self,
        cols: &[Option<f64>],
        rows: &[Option<f64>],
        cells_per_pixel: f64,
        factor: f64,
    ) -> Vec<f64> {
        let level = self.level_for(cells_per_pixel);
        let f = level.factor as f64;
        let off = (f - 1.0) / 2.0;
        let (ny, nx) = level.values.dim();
        let width = cols.len();
        let Some(flat) = level.values.as_slice() else {
            // Not in row-major order (never built so here): one sample at a time.
            let at = |c: usize, r: usize| Some((cols[c]?, rows[r]?));
            let s = self.sample(width, rows.len(), cells_per_pixel, &at);
            return s.iter().map(|v| v * factor).collect();
        };
        // (first cell, second cell, weight of the second) along one axis of the level, as
        // `bilinear` finds them; `None` outside or for NaN.
        let cell = |p: Option<f64>, n: usize| {
            let a = ((p? - off) / f).clamp(0.0, (n - 1) as f64);
            if !(a >= 0.0) {
                return None;
            }
            let i0 = a.floor() as usize;
            Some((i0, (i0 + 1).min(n - 1), a - i0 as f64))
        };
        // Per column (first cell, second cell, weight); a column outside the level gets the
        // weight NaN, which makes its samples NaN without a branch in the loop.
        let xcells: Vec<(usize, usize, f64)> = cols
            .iter()
            .map(|&p| cell(p, nx).unwrap_or((0, 0, f64::NAN)))
            .collect();
        let ycells: Vec<Option<(usize, usize, f64)>> = rows.iter().map(|&p| cell(p, ny)).collect();
        par_rows_vec(rows.len(), width, f64::NAN, |r, out| {
            let Some((i0, i1, ty)) = ycells[r] else {
                return;
            };
            let (r0, r1) = (&flat[i0 * nx..(i0 + 1) * nx], &flat[i1 * nx..(i1 + 1) * nx]);
            out.extend(xcells.iter().map(|&(j0, j1, tx)| {
                let (v00, v01, v10, v11) = (r0[j0], r0[j1], r1[j0], r1[j1]);
                let top = v00 + (v01 - v00) * tx;
                let bot = v10 + (v11 - v10) * tx;
                (top + (bot - top) * ty) * factor
            }));
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn levels_average_two_by_two_ignoring_nan() {
        let a = Array2::from_shape_fn((1100, 4), |(i, j)| if j == 1 { f64::NAN } else { i as f64 });
        let p = Pyramid::new(a);
        assert!(p.levels.len() >= 2);
        let l1 = &p.levels[1].values;
        assert_eq!(l1.dim(), (550, 2));
        // Rows 0 and 1 average to 0.5; the NaN column is ignored in the first cell.
        assert_eq!(l1[[0, 0]], 0.5);
        assert_eq!(l1[[0, 1]], 0.5);
        assert!(p.levels.last().unwrap().values.dim().0 <= 512);
    }

    #[test]
    fn coarse_level_is_chosen_only_when_pixels_are_large() {
        let a = Array2::from_shape_fn((2048, 2048), |(i, j)| (i + j) as f64);
        let p = Pyramid::new(a);
        assert_eq!(p.level_for(1.0).factor, 1);
        assert_eq!(p.level_for(3.9).factor, 2);
        assert_eq!(p.level_for(4.0).factor, 4);
        // Sampling a linear ramp at any level gives the ramp back (averaging preserves it).
        let s = p.sample(4, 4, 4.0, &|c, r| {
            Some(((c + 1) as f64 * 400.0, (r + 1) as f64 * 400.0))
        });
        for r in 0..4 {
            for c in 0..4 {
                let want = (c + r + 2) as f64 * 400.0;
                assert!((s[[r, c]] - want).abs() < 1e-9, "{r},{c}: {}", s[[r, c]]);
            }
        }
    }

    #[test]
    fn separable_sampling_equals_sampling_each_point() {
        // A non-linear surface with a hole, sampled at a level above 0 and at level 0, with
        // positions outside the data on both sides: the per-column/per-row path must give the
        // per-sample path's values bit for bit (times the factor).
        let mut a = Array2::from_shape_fn((700, 900), |(i, j)| {
            ((i as f64) * 0.013).sin() * 50.0 + (j as f64 * 0.007).cos() * (i as f64)
        });
        a[[300, 400]] = f64::NAN;
        let p = Pyramid::new(a);
        let cols: Vec<Option<f64>> = (0..57)
            .map(|c| (c != 5).then_some(-30.0 + c as f64 * 17.3))
            .collect();
        let rows: Vec<Option<f64>> = (0..41)
            .map(|r| (r != 40).then_some(-12.0 + r as f64 * 18.1))
            .collect();
        for cpp in [1.0, 2.5, 9.0] {
            let each = p.sample(57, 41, cpp, &|c, r| Some((cols[c]?, rows[r]?)));
            let sep = p.sample_separable(&cols, &rows, cpp, -3.0);
            let mut finite = 0;
            for r in 0..41 {
                for c in 0..57 {
                    let (want, got) = (each[[r, c]] * -3.0, sep[r * 57 + c]);
                    assert!(
                        want.to_bits() == got.to_bits() || (want.is_nan() && got.is_nan()),
                        "cpp {cpp} ({c}, {r}): {want} vs {got}"
                    );
                    finite += want.is_finite() as usize;
                }
            }
            assert!(finite > 57 * 41 / 2, "cpp {cpp}: {finite} finite samples");
            assert!(sep[5].is_nan() && sep[40 * 57 + 3].is_nan());
        }
    }
}

//! Line scoring: a matched filter (the discrete Radon transform along a candidate line) of the
//! gap-strength map, the field range where the line is seen, and suppression of neighbours
//! that explain the same ridge.
//!
//! For candidate (t, s) the line n(B) = t(e/h)B + s·n₀ is followed row by row through the map
//! in (V_g, B) with the gate model V = V_CNP + n/α. In each row the contrast is
//! c = g(line) − ½[g(line − δ) + g(line + δ)] where g(line) exceeds both sides (0 otherwise),
//! maximised over side offsets δ from one column up to half the distance to the nearest
//! candidate line of no greater complexity (so a complex candidate lying inside the broad
//! plateau of a simpler state has no contrast). Both sides must lie inside the map: a line
//! running along the map's edge, or down the flank of a broader feature, is not a ridge. The contrast is
//! smoothed over a few rows; the line is seen over the strongest long-enough run of rows where
//! the smoothed contrast exceeds the threshold (and, in as many rows, its own contrast does),
//! its lowest field is the onset, and the score is the mean contrast over that run (row-noise
//! units) with a t-statistic against its row-to-row (successive-difference) scatter.

use crate::constants::E_OVER_H;
use crate::gate::SingleGate;
use crate::line::{Family, Line};
use crate::map::Map;
use crate::rational::Rational;
use ndarray::Array2;
use rayon::prelude::*;
use serde::{Deserialize, Serialize};

/// Thresholds of the line detector.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct ScoreOptions {
    /// Smoothed row contrast a row must exceed to count as seen (row-noise units).
    pub row_threshold: f64,
    /// Smallest mean contrast over the seen run for a detection.
    pub min_score: f64,
    /// Smallest t-statistic of the mean contrast.
    pub min_t: f64,
    /// Smallest number of rows in the seen run (also at least 4 % of the rows).
    pub min_rows: usize,
    /// A candidate of complexity c must be seen over max(1, c × this) times the smallest
    /// run: the complex families hold many more lines, so a chance alignment with a few rows
    /// of some ridge is likelier among them and they need longer evidence (the fractional
    /// fan and the degenerate integer sequence excepted, see [`rows_scale`]).
    pub rows_per_complexity: f64,
    /// Two detections closer than this many columns on average over their common rows explain
    /// the same ridge.
    pub merge_columns: f64,
    /// Power of the complexity by which the general Wannier family's smallest score grows
    /// (see [`score_needed`]).
    #[serde(default)]
    pub wannier_score_power: f64,
}

impl Default for ScoreOptions {
    fn default() -> Self {
        ScoreOptions {
            row_threshold: 1.5,
            min_score: 2.5,
            min_t: 2.0,
            min_rows: 4,
            rows_per_complexity: 0.5,
            merge_columns: 1.6,
            wannier_score_power: 0.75,
        }
    }
}

/// Where in density a candidate's line can exist in a device with a superlattice: the Landau
/// levels of the main Dirac cone fill the densities up to half way to the satellite cones
/// (|n| ≤ 2n₀), those of a satellite cone at s = ±4 the densities beyond (±n ≥ 2n₀); a general
/// Wannier line (a gap of the Hofstadter spectrum) can cross any density. Without n₀ every
/// line is a main-cone line everywhere.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Cone {
    /// Anywhere in density.
    Everywhere,
    /// |n| ≤ [`CONE_BOUNDARY_N0`]·n₀.
    Main,
    /// sign(s)·n ≥ [`CONE_BOUNDARY_N0`]·n₀.
    Satellite,
}

/// Density, in units of n₀, where the main cone's Landau levels give way to a satellite
/// cone's (half way from charge neutrality to the satellite Dirac point at 4n₀).
pub const CONE_BOUNDARY_N0: f64 = 2.0;

impl Cone {
    /// The cone of a line of `family` with intercept `s`.
    pub fn of(family: Family, s: Rational) -> Cone {
        match family {
            Family::Integer | Family::BrokenSymmetry | Family::CompositeFermion if s.is_zero() => {
                Cone::Main
            }
            Family::Satellite if !s.is_zero() => Cone::Satellite,
            _ => Cone::Everywhere,
        }
    }

    /// True when density `n_m2` (m⁻²) lies in the cone of a line with intercept `s`, for a
    /// moiré cell of `n0_m2` carriers per m² (None: no superlattice, always true).
    pub fn holds(self, s: Rational, n_m2: f64, n0_m2: Option<f64>) -> bool {
        let Some(n0) = n0_m2.filter(|v| *v > 0.0) else {
            return true;
        };
        match self {
            Cone::Everywhere => true,
            Cone::Main => n_m2.abs() <= CONE_BOUNDARY_N0 * n0,
            Cone::Satellite => s.to_f64().signum() * n_m2 >= CONE_BOUNDARY_N0 * n0,
        }
    }
}

/// A candidate line with the complexity used to rank it against neighbours.
#[derive(Debug, Clone, PartialEq)]
pub struct Candidate {
    /// The predicted line.
    pub line: Line,
    /// Slope t (e/h) and intercept s (n₀).
    pub t: Rational,
    /// Intercept in carriers per moiré cell.
    pub s: Rational,
    /// Complexity ≥ 1: grows with the denominators, with |t|, and from the degenerate sequence
    /// to symmetry-broken, fractional and Wannier families.
    pub complexity: f64,
    /// Where in density the line can exist.
    pub cone: Cone,
}

/// Complexity of a (t, s) line of `family`.
pub fn complexity(family: Family, t: Rational, s: Rational) -> f64 {
    let base = match family {
        Family::Integer => 1.0,
        Family::BrokenSymmetry => 2.0,
        Family::CompositeFermion => 2.5,
        Family::Satellite => 2.0,
        Family::Wannier => 2.5,
        Family::BrownZak => 3.0,
    };
    base + (t.denom() - 1) as f64 + (s.denom() - 1) as f64 + T_COMPLEXITY * t.abs().to_f64()
}

impl Candidate {
    /// A candidate from a gap line (None for a Brown–Zak field line).
    pub fn from_line(line: Line) -> Option<Candidate> {
        let (t, s) = line.ts()?;
        let c = complexity(line.family, t, s);
        Some(Candidate {
            cone: Cone::of(line.family, s),
            line,
            t,
            s,
            complexity: c,
        })
    }
}

/// The evidence for one candidate line.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct LineEvidence {
    /// Index of the candidate in the list scored.
    pub candidate: usize,
    /// Mean contrast over the rows where the line is seen (row-noise units); 0 if never seen.
    pub score: f64,
    /// t-statistic of that mean against the row-to-row scatter.
    pub t_stat: f64,
    /// Lowest field of the seen run, T.
    pub b_onset_t: Option<f64>,
    /// Highest field of the seen run, T.
    pub b_max_t: Option<f64>,
    /// Rows in the seen run.
    pub rows_seen: usize,
    /// Rows where the line lies inside the map.
    pub rows_inside: usize,
    /// Smallest score that counts as a detection for this candidate's complexity.
    #[serde(default)]
    pub score_needed: f64,
}

/// Fractional column of density `n` (m⁻²) on the map's gate axis, or None outside.
fn column_of(map: &Map, gate: &SingleGate, n: f64) -> Option<f64> {
    map.x().fractional_index(gate.gate_for_density(n))
}

fn sample(row: &[f64], f: f64) -> f64 {
    if !(f >= 0.0) {
        return f64::NAN;
    }
    let i = f.floor() as usize;
    if i + 1 >= row.len() {
        return if i + 1 == row.len() && f == i as f64 {
            row[i]
        } else {
            f64::NAN
        };
    }
    let w = f - i as f64;
    row[i] * (1.0 - w) + row[i + 1] * w
}

/// Columns of every candidate in every row (NaN outside the map).
fn positions(map: &Map, gate: &SingleGate, n0: Option<f64>, cands: &[Candidate]) -> Array2<f64> {
    let b = map.y().values();
    let mut pos = Array2::from_elem((b.len(), cands.len()), f64::NAN);
    pos.outer_iter_mut()
        .into_par_iter()
        .enumerate()
        .for_each(|(i, mut row)| {
            for (k, c) in cands.iter().enumerate() {
                let moire = if c.s.is_zero() {
                    Some(0.0)
                } else {
                    n0.map(|n0| c.s.to_f64() * n0)
                };
                if let Some(m) = moire {
                    let n = c.t.to_f64() * E_OVER_H * b[i] + m;
                    if !c.cone.holds(c.s, n, n0) {
                        continue;
                    }
                    if let Some(f) = column_of(map, gate, n) {
                        row[k] = f;
                    }
                }
            }
        });
    pos
}

/// Smallest side offset of the matched filter, in columns: a line closer than twice this to
/// a neighbour that could explain the same ridge gives no evidence in that row (two minima
/// two gate steps apart are still told apart by the sample between them).
pub const MIN_SIDE_COLUMNS: f64 = 1.0;

/// Growth of a candidate's complexity with |t|.
const T_COMPLEXITY: f64 = 0.02;

/// Score every candidate on the gap-strength map `g` of `map` (same grid).
pub fn score_lines(
    map: &Map,
    g: &Array2<f64>,
    gate: &SingleGate,
    n0_m2: Option<f64>,
    cands: &[Candidate],
    opts: &ScoreOptions,
) -> Vec<LineEvidence> {
    let rows = g.nrows();
    let pos = positions(map, gate, n0_m2, cands);
    let b = map.y().values();
    let win = (rows / 25).max(1);
    let min_rows = opts.min_rows.max(rows / 25);
    let dmax = side_limits(&pos, cands, map.x().len(), None);
    let evaluate = |k: usize, dmax: &Array2<f64>| {
        let col: Vec<f64> = (0..rows).map(|i| pos[[i, k]]).collect();
        let lim: Vec<f64> = (0..rows).map(|i| dmax[[i, k]]).collect();
        let need = (min_rows as f64 * rows_scale(&cands[k], opts)).ceil() as usize;
        let score_needed = score_needed(&cands[k], opts);
        line_evidence(k, g, &col, &lim, b, win, (need, score_needed), opts)
    };
    let first: Vec<(LineEvidence, Vec<bool>)> = (0..cands.len())
        .into_par_iter()
        .map(|k| evaluate(k, &dmax))
        .collect();
    // Second look for the fractional fan lines: near charge neutrality the general Wannier
    // family's many simpler lines cross them in every row, so there only simpler lines that
    // stand on a ridge in a row keep a fraction from it (a Wannier line only where it stands
    // no lower than the fraction: one crossing the fraction's own ridge stands on it below
    // its crest).
    let ridges = Array2::from_shape_fn((rows, cands.len()), |(i, k)| first[k].1[i]);
    let heights = line_heights(g, &pos);
    let dmax2 = side_limits(&pos, cands, map.x().len(), Some((&ridges, &heights)));
    first
        .into_par_iter()
        .enumerate()
        .map(|(k, (ev, _))| {
            if cands[k].line.family == Family::CompositeFermion {
                evaluate(k, &dmax2).0
            } else {
                ev
            }
        })
        .collect()
}

/// The gap strength under every candidate line in every row (NaN outside the map).
fn line_heights(g: &Array2<f64>, pos: &Array2<f64>) -> Array2<f64> {
    Array2::from_shape_fn(pos.dim(), |(i, k)| {
        let f = pos[[i, k]];
        match g.row(i).as_slice() {
            Some(row) if f.is_finite() => sample(row, f),
            _ => f64::NAN,
        }
    })
}

/// Per row and candidate, the largest side offset in columns: half the distance to the
/// nearest other candidate line of no greater complexity (a coincident line counts, so where
/// lines converge no row is evidence for any one of them, and a complex candidate inside the
/// broad plateau of a simpler state has no contrast). With `ridges` (rows × candidates), a
/// simpler candidate limits another only in the rows where it stands on a ridge itself, or
/// where it is a fan line (s = 0) closer than two smallest side offsets: where the fan
/// converges towards zero field no row is evidence for a fraction between its lines. With
/// `ridges` comes the gap strength under each line (rows × candidates): a simpler line off
/// the fan (s ≠ 0) limits only where it stands no lower than the candidate. A Wannier line
/// crossing the candidate's own ridge at a slant stands on that ridge for a few rows, but on
/// its flank, below the candidate on the crest; a fan line runs along beside the candidate,
/// and its ridge there is its own. Rows × candidates.
fn side_limits(
    pos: &Array2<f64>,
    cands: &[Candidate],
    cols: usize,
    ridges: Option<(&Array2<bool>, &Array2<f64>)>,
) -> Array2<f64> {
    let rows = pos.nrows();
    let mut dmax = Array2::from_elem((rows, cands.len()), f64::NAN);
    dmax.outer_iter_mut()
        .into_par_iter()
        .enumerate()
        .for_each(|(i, mut out)| {
            let mut members: Vec<(f64, usize)> = (0..cands.len())
                .filter(|&k| pos[[i, k]].is_finite())
                .map(|k| (pos[[i, k]], k))
                .collect();
            members.sort_by(|a, c| a.0.total_cmp(&c.0));
            // A fan line (s = 0) this close is not told apart whether or not it stands on a
            // ridge: where the fan converges at low field no row is evidence for a fraction.
            let unresolved = |d: f64| d < 2.0 * MIN_SIDE_COLUMNS;
            for (r, &(pk, m)) in members.iter().enumerate() {
                let ck = cands[m].complexity;
                // Whether candidate `o`, `d` columns away, limits this one.
                let limits = |o: usize, d: f64| {
                    cands[o].complexity <= ck
                        && ((unresolved(d) && cands[o].s.is_zero())
                            || ridges.is_none_or(|(r, h)| {
                                r[[i, o]] && (cands[o].s.is_zero() || h[[i, o]] >= h[[i, m]])
                            }))
                };
                let mut best = cols as f64;
                for &(po, o) in members[..r].iter().rev() {
                    let d = pk - po;
                    if d >= best {
                        break;
                    }
                    if limits(o, d) {
                        best = d;
                        break;
                    }
                }
                for &(po, o) in &members[r + 1..] {
                    let d = po - pk;
                    if d >= best {
                        break;
                    }
                    if limits(o, d) {
                        best = d;
                        break;
                    }
                }
                out[m] = 0.5 * best;
            }
        });
    dmax
}

/// The evidence for candidate `k` from its column `col` in each row (NaN outside the map or
/// its cone) and its largest side offset `lim` per row, on the gap-strength map `g` with
/// fields `b` (T); `win` rows of smoothing on each side, `need` rows for a detection; with it,
/// per row, whether the line stands on a ridge there (smoothed contrast above the threshold).
#[allow(clippy::too_many_arguments)]
fn line_evidence(
    k: usize,
    g: &Array2<f64>,
    col: &[f64],
    lim: &[f64],
    b: &[f64],
    win: usize,
    (need, score_needed): (usize, f64),
    opts: &ScoreOptions,
) -> (LineEvidence, Vec<bool>) {
    let rows = col.len();
    let mut contrast = vec![f64::NAN; rows];
    let mut inside = 0;
    for i in 0..rows {
        let f = col[i];
        if !f.is_finite() {
            continue;
        }
        let row = g.row(i);
        let row = row.as_slice().expect("standard layout");
        let gc = sample(row, f);
        if !gc.is_finite() {
            continue;
        }
        // Unresolved from a neighbour that explains the same ridge: no evidence either way.
        if !(lim[i] >= MIN_SIDE_COLUMNS) {
            continue;
        }
        let dhi = lim[i];
        let mut best = f64::NEG_INFINITY;
        let mut d = MIN_SIDE_COLUMNS;
        loop {
            let (l, r) = (sample(row, f - d), sample(row, f + d));
            // A ridge needs lower ground on both sides: a line at the map's edge or on
            // the flank of a broader feature (not above either side) shows nothing.
            if l.is_finite() && r.is_finite() {
                let c = if gc > l.max(r) {
                    gc - 0.5 * (l + r)
                } else {
                    0.0
                };
                best = best.max(c);
            }
            if d >= dhi {
                break;
            }
            d = (d * 1.6).min(dhi);
        }
        if best.is_finite() {
            contrast[i] = best;
            inside += 1;
        }
    }
    // Smoothed contrast: the mean of the finite contrasts within `win` rows on each side, from
    // running sums (O(rows)).
    let mut sum = vec![0.0; rows + 1];
    let mut count = vec![0usize; rows + 1];
    for i in 0..rows {
        let finite = contrast[i].is_finite();
        sum[i + 1] = sum[i] + if finite { contrast[i] } else { 0.0 };
        count[i + 1] = count[i] + usize::from(finite);
    }
    let smooth: Vec<f64> = (0..rows)
        .map(|i| {
            if !contrast[i].is_finite() {
                return f64::NAN;
            }
            let lo = i.saturating_sub(win);
            let hi = (i + win + 1).min(rows);
            (sum[hi] - sum[lo]) / (count[hi] - count[lo]) as f64
        })
        .collect();
    // The run of rows above the threshold with the largest summed contrast, among the runs
    // long enough to count (a short run only when no run is long enough).
    let mut best_run: Option<(usize, usize, f64)> = None;
    let mut i = 0;
    while i < rows {
        if smooth[i].is_finite() && smooth[i] > opts.row_threshold {
            let start = i;
            let mut s = 0.0;
            while i < rows && smooth[i].is_finite() && smooth[i] > opts.row_threshold {
                s += contrast[i];
                i += 1;
            }
            let better = match best_run {
                None => true,
                Some((a, z, bs)) => {
                    let (long, was_long) = (i - start >= need, z - a >= need);
                    (long && !was_long) || (long == was_long && s > bs)
                }
            };
            if better {
                best_run = Some((start, i, s));
            }
        } else {
            i += 1;
        }
    }
    let mut ev = LineEvidence {
        candidate: k,
        score: 0.0,
        t_stat: 0.0,
        b_onset_t: None,
        b_max_t: None,
        rows_seen: 0,
        rows_inside: inside,
        score_needed,
    };
    if let Some((a, z, _)) = best_run {
        let v = &contrast[a..z];
        let n = v.len() as f64;
        let mean = v.iter().sum::<f64>() / n;
        // Row-to-row scatter from successive differences (von Neumann): a state whose gap
        // grows along the run is not made uncertain by its own growth.
        let var = if v.len() > 1 {
            v.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum::<f64>() / (2.0 * (n - 1.0))
        } else {
            0.0
        };
        ev.score = mean;
        ev.t_stat = mean / (var.sqrt() / n.sqrt()).max(1e-9);
        ev.rows_seen = v.len();
        let (b0, b1) = (b[a], b[z - 1]);
        ev.b_onset_t = Some(b0.min(b1));
        ev.b_max_t = Some(b0.max(b1));
        // The smoothing spreads a bright spot (a crossing, a horizontal feature) over the
        // rows around it; the line itself must stand out in enough rows of its own.
        let own = v.iter().filter(|&&c| c > opts.row_threshold).count();
        if v.len() < need || own < need {
            ev.score = 0.0;
        }
    }
    let ridge = smooth.iter().map(|&c| c > opts.row_threshold).collect();
    (ev, ridge)
}

/// How many times the smallest run a candidate must be seen over: its complexity ×
/// [`ScoreOptions::rows_per_complexity`] (at least 1), except for two small families, which
/// need only the smallest run. Each holds a few dozen lines (little look-elsewhere effect),
/// and each is seen where the map holds few rows for it: the fractional fan opens only at the
/// highest fields, and a high filling of the stack's degenerate sequence (ν = ±54 … ±62 of a
/// fourfold sequence, say) lies inside the gate range only over the lowest fields, where its
/// line leaves the map after a few rows.
pub fn rows_scale(cand: &Candidate, opts: &ScoreOptions) -> f64 {
    if matches!(cand.line.family, Family::CompositeFermion | Family::Integer) {
        1.0
    } else {
        (opts.rows_per_complexity * cand.complexity).max(1.0)
    }
}

/// Smallest mean contrast that detects `cand`: [`ScoreOptions::min_score`], raised for the
/// general Wannier family to min_score × complexity^[`ScoreOptions::wannier_score_power`]. That
/// family holds many times more lines than all the others together (every slope with every
/// intercept), so a chance alignment of some ridge with one of them is that much likelier
/// (the look-elsewhere effect), the more so the finer its fractions.
pub fn score_needed(cand: &Candidate, opts: &ScoreOptions) -> f64 {
    if cand.line.family == Family::Wannier {
        opts.min_score * cand.complexity.max(1.0).powf(opts.wannier_score_power)
    } else {
        opts.min_score
    }
}

/// True when an evidence passes the detection thresholds.
pub fn is_detected(ev: &LineEvidence, opts: &ScoreOptions) -> bool {
    ev.score >= opts.min_score.max(ev.score_needed) && ev.t_stat >= opts.min_t
}

/// Non-maximum suppression: of detections whose lines lie within `merge_columns` of each other
/// (mean over their common seen rows), keep the one with the better score per complexity
/// (the smaller complexity wins ties). Returns the kept evidence indices, best first.
pub fn suppress_neighbours(
    map: &Map,
    gate: &SingleGate,
    n0_m2: Option<f64>,
    cands: &[Candidate],
    evidence: &[LineEvidence],
    opts: &ScoreOptions,
) -> Vec<usize> {
    let key = |e: &LineEvidence| e.score / cands[e.candidate].complexity.sqrt();
    let mut order: Vec<usize> = (0..evidence.len())
        .filter(|&i| is_detected(&evidence[i], opts))
        .collect();
    order.sort_by(|&a, &b| {
        key(&evidence[b]).total_cmp(&key(&evidence[a])).then(
            cands[evidence[a].candidate]
                .complexity
                .total_cmp(&cands[evidence[b].candidate].complexity),
        )
    });
    let b = map.y().values();
    let col = |k: usize, bt: f64| -> f64 {
        let c = &cands[k];
        let m = if c.s.is_zero() {
            0.0
        } else {
            c.s.to_f64() * n0_m2.unwrap_or(f64::NAN)
        };
        column_of(map, gate, c.t.to_f64() * E_OVER_H * bt + m).unwrap_or(f64::NAN)
    };
    let mut kept: Vec<usize> = Vec::new();
    for &i in &order {
        let ei = &evidence[i];
        let (lo, hi) = (ei.b_onset_t.unwrap_or(0.0), ei.b_max_t.unwrap_or(0.0));
        let clash = kept.iter().any(|&j| {
            let ej = &evidence[j];
            let a = lo.max(ej.b_onset_t.unwrap_or(0.0));
            let z = hi.min(ej.b_max_t.unwrap_or(0.0));
            if a > z {
                return false;
            }
            let mut sum = 0.0;
            let mut n = 0;
            for &bt in b.iter().filter(|&&bt| bt >= a && bt <= z) {
                let d = (col(ei.candidate, bt) - col(ej.candidate, bt)).abs();
                if d.is_finite() {
                    sum += d;
                    n += 1;
                }
            }
            n > 0 && sum / (n as f64) < opts.merge_columns
        });
        if !clash {
            kept.push(i);
        }
    }
    kept
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::map::{Axis, Quantity};

    /// The fractional fan's ν = 1/3.
    fn one_third() -> Candidate {
        let line = Line::gap(
            Family::CompositeFermion,
            "test",
            Rational::new(1, 3).unwrap(),
            Rational::ZERO,
        );
        Candidate::from_line(line).unwrap()
    }

    fn cand(family: Family, t: i64, s: i64) -> Candidate {
        let line = Line::gap(family, "test", Rational::integer(t), Rational::integer(s));
        Candidate::from_line(line).expect("a gap line")
    }

    #[test]
    fn a_high_filling_of_the_degenerate_sequence_needs_only_the_smallest_run() {
        let o = ScoreOptions::default();
        // ν = 62 of the fourfold sequence: complexity above 2, yet one smallest run.
        let high = cand(Family::Integer, 62, 0);
        assert!(o.rows_per_complexity * high.complexity > 1.0);
        assert_eq!(rows_scale(&high, &o), 1.0);
        // A symmetry-broken filling as complex still needs its longer run.
        let broken = cand(Family::BrokenSymmetry, 61, 0);
        assert!(rows_scale(&broken, &o) > 1.0, "{}", rows_scale(&broken, &o));
        assert_eq!(
            rows_scale(&broken, &o),
            o.rows_per_complexity * broken.complexity
        );
    }

    /// Gate −10…10 V in 0.05 V steps, field 0…12 T over 121 rows; α = 10¹⁵ m⁻²V⁻¹, V_CNP = 0.
    fn fan_grid() -> (Map, SingleGate) {
        let x = Axis::uniform("vg", Quantity::Gate, -10.0, 0.05, 401).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 0.0, 0.1, 121).unwrap();
        let gate = SingleGate {
            alpha_m2_per_v: 1e15,
            v_cnp: 0.0,
        };
        (Map::new(x, y), gate)
    }

    #[test]
    fn a_ridge_is_seen_and_a_flank_at_the_map_edge_is_not() {
        // Gate −8.2…21.7 V in 0.1 V steps, field 1…13 T; n = 10¹⁵ m⁻² V⁻¹ · V, n₀ = 4×10¹⁵ m⁻².
        let (rows, cols) = (60, 300);
        let x = Axis::uniform("vg", Quantity::Gate, -8.2, 0.1, cols).unwrap();
        let y = Axis::uniform("b", Quantity::Field, 1.0, 12.0 / (rows - 1) as f64, rows).unwrap();
        let map = Map::new(x, y);
        let gate = SingleGate {
            alpha_m2_per_v: 1e15,
            v_cnp: 0.0,
        };
        let n0 = 4e15;
        let nu2 = cand(Family::Integer, 2, 0);
        // (t, s) = (0, −2) lies at V = −8 V, two columns from the map's left edge, on a steep
        // flank that falls away from the edge: higher on one side, lower on the other.
        let edge = cand(Family::Wannier, 0, -2);
        let b = map.y().values().to_vec();
        let g = Array2::from_shape_fn((rows, cols), |(i, j)| {
            // The ν = 2 ridge: V = 2(e/h)B/α, in columns from −8.2 V.
            let c2 = (2.0 * E_OVER_H * b[i] / 1e15 + 8.2) / 0.1;
            let ridge = 40.0 * (-((j as f64 - c2) / 2.0).powi(2)).exp();
            let flank = (100.0 - 5.0 * j as f64).max(0.0);
            // Small deterministic ripple, ±0.3.
            let ripple = 0.3 * ((7 * i + 13 * j) as f64).sin();
            ridge + flank + ripple
        });
        let cands = vec![nu2, edge];
        let o = ScoreOptions::default();
        let ev = score_lines(&map, &g, &gate, Some(n0), &cands, &o);
        assert!(is_detected(&ev[0], &o), "ridge missed: {:?}", ev[0]);
        assert!(ev[0].score > 20.0, "{:?}", ev[0]);
        assert!(
            !is_detected(&ev[1], &o),
            "flank taken for a line: {:?}",
            ev[1]
        );
        assert_eq!(
            suppress_neighbours(&map, &gate, Some(n0), &cands, &ev, &o),
            vec![0]
        );
    }

    #[test]
    fn a_long_faint_run_wins_over_a_short_bright_spot_and_converging_rows_are_no_evidence() {
        let (map, gate) = fan_grid();
        let (rows, cols) = map.shape();
        let b = map.y().values().to_vec();
        // ν = 6: a faint ridge (contrast 6) from 4 T up; a bright spot (300) at the charge
        // neutrality point in the three lowest rows, where every s = 0 line meets.
        let g = Array2::from_shape_fn((rows, cols), |(i, j)| {
            let c6 = (6.0 * E_OVER_H * b[i] / 1e15 + 10.0) / 0.05;
            let c0 = 10.0 / 0.05;
            let ridge = if b[i] >= 4.0 {
                6.0 * (-((j as f64 - c6) / 1.5).powi(2)).exp()
            } else {
                0.0
            };
            let spot = if i < 3 {
                300.0 * (-((j as f64 - c0) / 2.0).powi(2)).exp()
            } else {
                0.0
            };
            ridge + spot + 0.2 * ((5 * i + 11 * j) as f64).sin()
        });
        let cands = vec![
            cand(Family::Integer, 2, 0),
            cand(Family::Integer, -2, 0),
            cand(Family::Integer, 6, 0),
            cand(Family::Integer, -6, 0),
        ];
        let o = ScoreOptions::default();
        let ev = score_lines(&map, &g, &gate, None, &cands, &o);
        assert!(is_detected(&ev[2], &o), "ν = 6 missed: {:?}", ev[2]);
        let onset = ev[2].b_onset_t.unwrap();
        assert!((3.5..=4.5).contains(&onset), "onset {onset} T");
        for k in [0, 1, 3] {
            assert!(
                !is_detected(&ev[k], &o),
                "the spot made a line: {:?}",
                ev[k]
            );
        }
    }

    #[test]
    fn a_bright_spot_on_a_line_is_not_a_line_when_the_smoothing_alone_makes_the_run() {
        // On the ν = 3 line a spot of contrast 100 in three rows near 8 T (where some other feature
        // crosses it); on the ν = −3 line a steady faint ridge of contrast 5 from 6 T up.
        let (map, gate) = fan_grid();
        let (rows, cols) = map.shape();
        let b = map.y().values().to_vec();
        let column = |nu: f64, i: usize| (nu * E_OVER_H * b[i] / 1e15 + 10.0) / 0.05;
        let g = Array2::from_shape_fn((rows, cols), |(i, j)| {
            let peak = |c: f64, w: f64| (-((j as f64 - c) / w).powi(2)).exp();
            let spot = if (80..83).contains(&i) {
                100.0 * peak(column(3.0, i), 1.5)
            } else {
                0.0
            };
            let ridge = if b[i] >= 6.0 {
                5.0 * peak(column(-3.0, i), 1.5)
            } else {
                0.0
            };
            spot + ridge + 0.2 * ((5 * i + 11 * j) as f64).sin()
        });
        let cands = vec![cand(Family::Integer, 3, 0), cand(Family::Integer, -3, 0)];
        let o = ScoreOptions::default();
        let ev = score_lines(&map, &g, &gate, None, &cands, &o);
        assert!(!is_detected(&ev[0], &o), "a spot made a line: {:?}", ev[0]);
        assert!(
            is_detected(&ev[1], &o),
            "the faint ridge missed: {:?}",
            ev[1]
        );
    }

    #[test]
    fn fan_lines_live_in_their_own_cone() {
        let n0 = 2.0e16;
        let main = Cone::of(Family::Integer, Rational::ZERO);
        let sat = Cone::of(Family::Satellite, Rational::integer(-4));
        let any = Cone::of(Family::Wannier, Rational::integer(1));
        assert_eq!(
            (main, sat, any),
            (Cone::Main, Cone::Satellite, Cone::Everywhere)
        );
        assert!(main.holds(Rational::ZERO, 1.9 * n0, Some(n0)));
        assert!(!main.holds(Rational::ZERO, -2.1 * n0, Some(n0)));
        assert!(sat.holds(Rational::integer(-4), -2.1 * n0, Some(n0)));
        assert!(!sat.holds(Rational::integer(-4), -1.9 * n0, Some(n0)));
        assert!(!sat.holds(Rational::integer(-4), 3.0 * n0, Some(n0)));
        assert!(any.holds(Rational::integer(1), 3.0 * n0, Some(n0)));
        // Without a superlattice there are no cones.
        assert!(main.holds(Rational::ZERO, 10.0 * n0, None));
    }

    #[test]
    fn the_wannier_family_needs_more_evidence_than_the_fan() {
        let o = ScoreOptions::default();
        let fan = cand(Family::Integer, 6, 0);
        let wannier = cand(Family::Wannier, 1, 2);
        assert_eq!(score_needed(&fan, &o), o.min_score);
        assert!(score_needed(&wannier, &o) > 1.5 * o.min_score);
    }

    #[test]
    fn a_simpler_line_limits_a_fraction_only_where_it_stands_on_a_ridge() {
        // Two rows; a Wannier line (simpler) 1.5 columns from the fractional ν = 1/3.
        let wannier = cand(Family::Wannier, 1, 1);
        let fraction = one_third();
        assert!(wannier.complexity < fraction.complexity);
        let cands = vec![wannier, fraction];
        let pos = Array2::from_shape_vec((2, 2), vec![10.0, 11.5, 10.0, 11.5]).unwrap();
        let all = side_limits(&pos, &cands, 100, None);
        assert_eq!(all[[0, 1]], 0.75);
        // The Wannier line shows a ridge in row 0 only.
        let ridges = Array2::from_shape_vec((2, 2), vec![true, false, false, false]).unwrap();
        let level = Array2::zeros((2, 2));
        let seen = side_limits(&pos, &cands, 100, Some((&ridges, &level)));
        assert_eq!(seen[[0, 1]], 0.75);
        assert_eq!(seen[[1, 1]], 50.0);
        // The simpler line is never limited by the fraction.
        assert_eq!(seen[[1, 0]], 50.0);
    }

    #[test]
    fn where_the_fan_converges_a_fraction_beside_a_fan_line_has_no_evidence() {
        // Row 0 (high field): ν = 0 is 30 columns from ν = 1/3; row 1 (low field): 1.5 columns.
        // ν = 0 stands on a ridge in neither row; a Wannier line sits 1.5 columns from the
        // fraction in row 0, also off any ridge.
        let fan = cand(Family::BrokenSymmetry, 0, 0);
        let wannier = cand(Family::Wannier, 1, 1);
        let fraction = one_third();
        assert!(fan.complexity < fraction.complexity && wannier.complexity < fraction.complexity);
        let cands = vec![fan, wannier, fraction];
        let pos = Array2::from_shape_vec((2, 3), vec![10.0, 41.5, 40.0, 10.0, 80.0, 11.5]).unwrap();
        let ridges = Array2::from_elem((2, 3), false);
        let level = Array2::zeros((2, 3));
        let seen = side_limits(&pos, &cands, 100, Some((&ridges, &level)));
        // Unresolved from the fan line: below the smallest side offset, so no evidence.
        assert!(seen[[1, 2]] < MIN_SIDE_COLUMNS, "{}", seen[[1, 2]]);
        // A Wannier line off its ridge does not limit it, nor does the far fan line.
        assert_eq!(seen[[0, 2]], 50.0);
    }

    #[test]
    fn a_wannier_line_below_a_fraction_on_its_crest_does_not_limit_it_but_a_fan_line_does() {
        // One row: the fraction ν = 1/3 on the crest (strength 30), a Wannier line and the fan's
        // ν = 0 each 1.5 columns away on a ridge, lower (20).
        let wannier = cand(Family::Wannier, 1, 1);
        let fan = cand(Family::BrokenSymmetry, 0, 0);
        let fraction = one_third();
        let cands = vec![wannier, fraction.clone()];
        let pos = Array2::from_shape_vec((1, 2), vec![10.0, 11.5]).unwrap();
        let ridges = Array2::from_elem((1, 2), true);
        let lower = Array2::from_shape_vec((1, 2), vec![20.0, 30.0]).unwrap();
        let seen = side_limits(&pos, &cands, 100, Some((&ridges, &lower)));
        assert_eq!(seen[[0, 1]], 50.0);
        // Standing as high as the fraction, the Wannier line does limit it.
        let level = Array2::from_shape_vec((1, 2), vec![30.0, 30.0]).unwrap();
        let seen = side_limits(&pos, &cands, 100, Some((&ridges, &level)));
        assert_eq!(seen[[0, 1]], 0.75);
        // A fan line on a ridge limits the fraction even below it.
        let pos = Array2::from_shape_vec((1, 2), vec![8.5, 11.5]).unwrap();
        let cands = vec![fan, fraction];
        let seen = side_limits(&pos, &cands, 100, Some((&ridges, &lower)));
        assert_eq!(seen[[0, 1]], 1.5);
        // Without ridges every simpler line limits.
        assert_eq!(side_limits(&pos, &cands, 100, None)[[0, 1]], 1.5);
    }
}

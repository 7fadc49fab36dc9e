//! Page geometry shared by layout and backends: rectangles in pt, y pointing down, and clipping
//! of polylines to a rectangle.

/// An axis-aligned rectangle on the page, pt, y downwards; `x0 ≤ x1`, `y0 ≤ y1`.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Rect {
    /// Left edge.
    pub x0: f64,
    /// Top edge.
    pub y0: f64,
    /// Right edge.
    pub x1: f64,
    /// Bottom edge.
    pub y1: f64,
}

impl Rect {
    /// Rectangle from its edges.
    pub fn new(x0: f64, y0: f64, x1: f64, y1: f64) -> Rect {
        Rect { x0, y0, x1, y1 }
    }

    /// Width, pt.
    pub fn width(&self) -> f64 {
        self.x1 - self.x0
    }

    /// Height, pt.
    pub fn height(&self) -> f64 {
        self.y1 - self.y0
    }

    /// Whether the interiors of the two rectangles intersect (touching edges do not count).
    pub fn overlaps(&self, o: &Rect) -> bool {
        self.x0 < o.x1 && o.x0 < self.x1 && self.y0 < o.y1 && o.y0 < self.y1
    }

    /// Whether `o` lies entirely inside this rectangle (edges included).
    pub fn contains_rect(&self, o: &Rect) -> bool {
        o.x0 >= self.x0 && o.x1 <= self.x1 && o.y0 >= self.y0 && o.y1 <= self.y1
    }

    /// Whether the point lies inside (edges included).
    pub fn contains(&self, x: f64, y: f64) -> bool {
        x >= self.x0 && x <= self.x1 && y >= self.y0 && y <= self.y1
    }
}

/// Clip a polyline to `r`: the parts inside, each as its own polyline (Liang–Barsky per
/// segment). Non-finite vertices break the line.
pub fn clip_polyline(points: &[(f64, f64)], r: &Rect) -> Vec<Vec<(f64, f64)>> {
    let mut out: Vec<Vec<(f64, f64)>> = Vec::new();
    let mut current: Vec<(f64, f64)> = Vec::new();
    for w in points.windows(2) {
        let (a, b) = (w[0], w[1]);
        let finite = a.0.is_finite() && a.1.is_finite() && b.0.is_finite() && b.1.is_finite();
        match finite.then(|| clip_segment(a, b, r)).flatten() {
            Some((p, q, end_inside)) => {
                if current.is_empty() {
                    current.push(p);
                } else if current.last() != Some(&p) {
                    out.push(std::mem::take(&mut current));
                    current.push(p);
                }
                current.push(q);
                if !end_inside {
                    out.push(std::mem::take(&mut current));
                }
            }
            None => {
                if current.len() >= 2 {
                    out.push(std::mem::take(&mut current));
                }
                current.clear();
            }
        }
    }
    if current.len() >= 2 {
        out.push(current);
    }
    out.retain(|l| l.len() >= 2);
    out
}

/// The visible part of a segment and whether its end is the segment's own end.
type ClippedSegment = ((f64, f64), (f64, f64), bool);

/// Clip one segment to `r`.
fn clip_segment(a: (f64, f64), b: (f64, f64), r: &Rect) -> Option<ClippedSegment> {
    let (dx, dy) = (b.0 - a.0, b.1 - a.1);
    let mut t0 = 0.0f64;
    let mut t1 = 1.0f64;
    for (p, q) in [
        (-dx, a.0 - r.x0),
        (dx, r.x1 - a.0),
        (-dy, a.1 - r.y0),
        (dy, r.y1 - a.1),
    ] {
        if p == 0.0 {
            if q < 0.0 {
                return None;
            }
        } else {
            let t = q / p;
            if p < 0.0 {
                t0 = t0.max(t);
            } else {
                t1 = t1.min(t);
            }
        }
    }
    if t0 > t1 {
        return None;
    }
    let at = |t: f64| {
        if t == 0.0 {
            a
        } else if t == 1.0 {
            b
        } else {
            (a.0 + t * dx, a.1 + t * dy)
        }
    };
    Some((at(t0), at(t1), t1 == 1.0))
}

/// Simplify a polyline (Ramer–Douglas–Peucker): keep the ends and only the vertices needed so
/// that no dropped vertex lies farther than `tol` (same units as the points) from the kept
/// polyline. `tol ≤ 0` or fewer than three points return the input unchanged.
pub fn simplify_polyline(points: &[(f64, f64)], tol: f64) -> Vec<(f64, f64)> {
    if !(tol > 0.0) || points.len() < 3 {
        return points.to_vec();
    }
    let mut keep = vec![false; points.len()];
    keep[0] = true;
    keep[points.len() - 1] = true;
    let mut spans = vec![(0usize, points.len() - 1)];
    while let Some((a, b)) = spans.pop() {
        let (p, q) = (points[a], points[b]);
        let (dx, dy) = (q.0 - p.0, q.1 - p.1);
        let len = dx.hypot(dy);
        let dist = |v: (f64, f64)| {
            if len > 0.0 {
                ((v.0 - p.0) * dy - (v.1 - p.1) * dx).abs() / len
            } else {
                (v.0 - p.0).hypot(v.1 - p.1)
            }
        };
        let (mut far, mut worst) = (a, 0.0);
        for (i, &v) in points.iter().enumerate().take(b).skip(a + 1) {
            let d = dist(v);
            if d > worst {
                (far, worst) = (i, d);
            }
        }
        if worst > tol {
            keep[far] = true;
            spans.push((a, far));
            spans.push((far, b));
        }
    }
    points
        .iter()
        .zip(keep)
        .filter_map(|(&v, k)| k.then_some(v))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn simplify_keeps_corners_and_drops_collinear_points() {
        // Points on two straight legs meeting at (10, 0) → (10, 10): only the ends and the corner
        // matter.
        let mut pts: Vec<(f64, f64)> = (0..=10).map(|i| (i as f64, 0.0)).collect();
        pts.extend((1..=10).map(|i| (10.0, i as f64)));
        assert_eq!(
            simplify_polyline(&pts, 0.01),
            vec![(0.0, 0.0), (10.0, 0.0), (10.0, 10.0)]
        );
        // A hyperbola y = 1/x sampled densely: every dropped vertex within the tolerance of the
        // kept polyline, and far fewer vertices.
        let curve: Vec<(f64, f64)> = (0..200)
            .map(|i| {
                let x = 1.0 + i as f64 * 0.02;
                (x, 1.0 / x)
            })
            .collect();
        let kept = simplify_polyline(&curve, 1e-3);
        assert!(kept.len() < 40, "{} vertices kept", kept.len());
        for v in &curve {
            let d = kept
                .windows(2)
                .map(|w| segment_distance(*v, w[0], w[1]))
                .fold(f64::INFINITY, f64::min);
            assert!(d <= 1e-3 + 1e-12, "vertex {v:?} is {d} away");
        }
        assert_eq!(simplify_polyline(&curve, 0.0), curve);
    }

    fn segment_distance(v: (f64, f64), a: (f64, f64), b: (f64, f64)) -> f64 {
        let (dx, dy) = (b.0 - a.0, b.1 - a.1);
        let t = (((v.0 - a.0) * dx + (v.1 - a.1) * dy) / (dx * dx + dy * dy)).clamp(0.0, 1.0);
        (v.0 - a.0 - t * dx).hypot(v.1 - a.1 - t * dy)
    }

    #[test]
    fn clipping_keeps_inside_parts_only() {
        let r = Rect::new(0.0, 0.0, 10.0, 10.0);
        // Enters, leaves, re-enters.
        let pts = [
            (-5.0, 5.0),
            (5.0, 5.0),
            (15.0, 5.0),
            (15.0, 8.0),
            (5.0, 8.0),
        ];
        let parts = clip_polyline(&pts, &r);
        assert_eq!(parts.len(), 2);
        assert_eq!(parts[0], vec![(0.0, 5.0), (5.0, 5.0), (10.0, 5.0)]);
        assert_eq!(parts[1], vec![(10.0, 8.0), (5.0, 8.0)]);
        for p in parts.iter().flatten() {
            assert!(r.contains(p.0, p.1));
        }
        assert!(clip_polyline(&[(-1.0, -1.0), (-5.0, 20.0)], &r).is_empty());
        let diag = clip_polyline(&[(-10.0, -10.0), (20.0, 20.0)], &r);
        assert_eq!(diag, vec![vec![(0.0, 0.0), (10.0, 10.0)]]);
        assert!(clip_polyline(&[(1.0, 1.0), (f64::NAN, 2.0), (3.0, 3.0)], &r).is_empty());
    }
}

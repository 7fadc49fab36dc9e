//! Label placement: each label is tried at candidate positions around its anchors (points along
//! the labelled line, in order of preference); the first position that stays inside the panel
//! and overlaps neither an already placed label nor an obstacle wins. A label that fits nowhere
//! is dropped and counted.

use super::geom::Rect;

/// One label to place: its box size and candidate anchor points, all in pt on the page.
#[derive(Clone, Debug)]
pub struct LabelRequest {
    /// Box width, pt.
    pub width: f64,
    /// Box height, pt.
    pub height: f64,
    /// Anchor points on the page, pt, in order of preference.
    pub anchors: Vec<(f64, f64)>,
}

/// The outcome: one box per request (`None` when dropped) and the number dropped.
#[derive(Clone, Debug, PartialEq)]
pub struct Placement {
    /// Placed boxes, in request order.
    pub boxes: Vec<Option<Rect>>,
    /// How many labels could not be placed.
    pub dropped: usize,
}

/// Place labels inside `bounds` avoiding each other and `obstacles`. `gap` (pt) is the distance
/// kept between an anchor and an offset box.
pub fn place_labels(
    requests: &[LabelRequest],
    bounds: &Rect,
    obstacles: &[Rect],
    gap: f64,
) -> Placement {
    let mut placed: Vec<Rect> = Vec::new();
    let mut boxes = Vec::with_capacity(requests.len());
    let mut dropped = 0;
    for req in requests {
        let (w, h) = (req.width, req.height);
        let mut chosen = None;
        'search: for &(ax, ay) in &req.anchors {
            if !ax.is_finite() || !ay.is_finite() {
                continue;
            }
            // Centred on the anchor, then the four diagonal sides, then above/below/right/left.
            let offsets = [
                (-w / 2.0, -h / 2.0),
                (gap, -h - gap),
                (gap, gap),
                (-w - gap, -h - gap),
                (-w - gap, gap),
                (-w / 2.0, -h - gap),
                (-w / 2.0, gap),
                (gap, -h / 2.0),
                (-w - gap, -h / 2.0),
            ];
            for (ox, oy) in offsets {
                let r = Rect::new(ax + ox, ay + oy, ax + ox + w, ay + oy + h);
                if bounds.contains_rect(&r)
                    && !placed.iter().any(|p| p.overlaps(&r))
                    && !obstacles.iter().any(|p| p.overlaps(&r))
                {
                    chosen = Some(r);
                    break 'search;
                }
            }
        }
        match chosen {
            Some(r) => placed.push(r),
            None => dropped += 1,
        }
        boxes.push(chosen);
    }
    Placement { boxes, dropped }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn assert_valid(p: &Placement, bounds: &Rect, obstacles: &[Rect]) {
        let b: Vec<&Rect> = p.boxes.iter().flatten().collect();
        for (i, r) in b.iter().enumerate() {
            assert!(bounds.contains_rect(r), "box {i} leaves the panel: {r:?}");
            for o in obstacles {
                assert!(!r.overlaps(o), "box {i} covers an obstacle");
            }
            for s in &b[i + 1..] {
                assert!(!r.overlaps(s), "boxes overlap: {r:?} {s:?}");
            }
        }
        assert_eq!(p.boxes.iter().filter(|b| b.is_none()).count(), p.dropped);
    }

    #[test]
    fn two_hundred_lines_from_one_point() {
        // A fan: 200 lines radiating from the bottom-left corner region, labels along each.
        let bounds = Rect::new(0.0, 0.0, 200.0, 150.0);
        let origin = (20.0, 140.0);
        let reqs: Vec<LabelRequest> = (0..200)
            .map(|i| {
                let ang = -(i as f64 + 0.5) / 200.0 * std::f64::consts::FRAC_PI_2;
                let anchors = (3..=19)
                    .map(|k| {
                        let r = k as f64 * 10.0;
                        (origin.0 + r * ang.cos(), origin.1 + r * ang.sin())
                    })
                    .collect();
                LabelRequest {
                    width: 14.0 + (i % 3) as f64 * 4.0,
                    height: 7.0,
                    anchors,
                }
            })
            .collect();
        let obstacles = [Rect::new(150.0, 0.0, 200.0, 30.0)];
        let p = place_labels(&reqs, &bounds, &obstacles, 1.0);
        assert_valid(&p, &bounds, &obstacles);
        assert_eq!(p.boxes.len(), 200);
        assert!(p.dropped > 0, "a crowded fan must drop some labels");
        assert!(p.dropped < 200 - 40, "only {} placed", 200 - p.dropped);
    }

    #[test]
    fn uncrowded_labels_sit_on_their_first_anchor() {
        let bounds = Rect::new(0.0, 0.0, 100.0, 100.0);
        let reqs = vec![
            LabelRequest {
                width: 10.0,
                height: 5.0,
                anchors: vec![(20.0, 20.0)],
            },
            LabelRequest {
                width: 10.0,
                height: 5.0,
                anchors: vec![(70.0, 70.0)],
            },
        ];
        let p = place_labels(&reqs, &bounds, &[], 1.0);
        assert_eq!(p.dropped, 0);
        assert_eq!(p.boxes[0], Some(Rect::new(15.0, 17.5, 25.0, 22.5)));
        // An anchor at the edge pushes the box inward, never out.
        let edge = vec![LabelRequest {
            width: 10.0,
            height: 5.0,
            anchors: vec![(0.0, 50.0)],
        }];
        let q = place_labels(&edge, &bounds, &[], 1.0);
        let r = q.boxes[0].unwrap();
        assert!(r.x0 >= 0.0 && (r.x0 - 1.0).abs() < 1e-12);
        // Too big for the panel: dropped.
        let big = vec![LabelRequest {
            width: 200.0,
            height: 5.0,
            anchors: vec![(50.0, 50.0)],
        }];
        assert_eq!(place_labels(&big, &bounds, &[], 1.0).dropped, 1);
    }
}

//! The one line model shared by indexing, figures and the viewer.
//!
//! Every gap is a straight line in the (n, B) plane, n(B) = t·(e/h)·B + s·n₀, with exact rational
//! t and s and n₀ = 1/A the density of one carrier per moiré cell. By the Středa formula t is the
//! Hall conductance of the gap in e²/h. A constant-filling line is (t = ν, s = 0). Brown–Zak
//! fields, where the flux per moiré cell is φ/φ₀ = p/q, are the other kind of line: B = const.
//!
//! A [`Frame`] is one of the planes a map is drawn in, always with a density-like x axis and a
//! field-like y axis: (V_g, B), (n, B), (ν, B) and the Wannier plane (n/n₀, φ/φ₀). Lines can be
//! evaluated in any frame, frame points mapped back to (n, B), and lines clipped to a frame
//! rectangle. Densities in m⁻², fields in T, gate voltages in V.

use crate::constants::{E2_OVER_H, E_OVER_H, FLUX_QUANTUM_H_OVER_E};
use crate::error::{Error, Result};
use crate::gate::SingleGate;
use crate::rational::Rational;
use serde::{Deserialize, Serialize};

/// Which physical family a line belongs to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, PartialOrd, Ord, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Family {
    /// Integer quantum Hall states of the fully degenerate Landau-level sequence.
    Integer,
    /// Integer states from lifted spin/valley (or layer) degeneracy.
    BrokenSymmetry,
    /// Fractional states on composite-fermion sequences.
    CompositeFermion,
    /// Landau levels fanning out from a moiré band edge or satellite Dirac point (s ≠ 0).
    Satellite,
    /// Chern-insulator lines (t, s) of the Wannier diagram, integer or fractional.
    Wannier,
    /// Fields where the flux per moiré cell is a simple fraction p/q.
    BrownZak,
}

impl Family {
    /// All families, in generation (and primary-membership) order.
    pub const ALL: [Family; 6] = [
        Family::Integer,
        Family::BrokenSymmetry,
        Family::CompositeFermion,
        Family::Satellite,
        Family::Wannier,
        Family::BrownZak,
    ];

    /// The family's name as written in JSON and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            Family::Integer => "integer",
            Family::BrokenSymmetry => "broken_symmetry",
            Family::CompositeFermion => "composite_fermion",
            Family::Wannier => "wannier",
            Family::Satellite => "satellite",
            Family::BrownZak => "brown_zak",
        }
    }
}

impl std::fmt::Display for Family {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.name())
    }
}

/// One reason a line is predicted: its family and the sequence inside it (e.g. `p/(2p+1)`).
#[derive(Debug, Clone, PartialEq, Eq, Hash, Serialize, Deserialize)]
pub struct Membership {
    /// The family.
    pub family: Family,
    /// Which sequence or rule of the family produced the line (free text, ASCII).
    pub sequence: String,
}

/// The geometry of a line.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(tag = "kind", rename_all = "snake_case")]
pub enum LineShape {
    /// A gap n(B) = t (e/h) B + s n₀; t and s are dimensionless exact rationals.
    Gap {
        /// Středa slope: Hall conductance in e²/h and density slope in units of e/h.
        t: Rational,
        /// Intercept in carriers per moiré cell (units of n₀).
        s: Rational,
    },
    /// A horizontal line at flux per moiré cell φ/φ₀ = `flux`, i.e. B = flux·φ₀/A.
    ConstantFlux {
        /// Flux per cell in units of φ₀ = h/e.
        flux: Rational,
    },
}

/// A predicted line with its family, memberships, label and expected Hall conductance.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Line {
    /// Primary family: the first membership.
    pub family: Family,
    /// Every family/sequence that predicts this line (no duplicates).
    pub memberships: Vec<Membership>,
    /// Geometry (t, s) or constant flux.
    pub shape: LineShape,
    /// Display label, minus signs as U+2212: `ν = 2/3`, `(t, s) = (−2, 5/2)`, `φ/φ₀ = 1/3`.
    pub label: String,
    /// Expected Hall conductance t in e²/h (None for a Brown–Zak field).
    pub hall_e2_per_h: Option<Rational>,
}

/// `r` as text with a typographic minus (U+2212).
pub fn signed_text(r: Rational) -> String {
    r.to_string().replace('-', "\u{2212}")
}

impl Line {
    /// A gap line (t, s) predicted by `family` through `sequence`.
    pub fn gap(family: Family, sequence: impl Into<String>, t: Rational, s: Rational) -> Line {
        let label = if s.is_zero() {
            format!("ν = {}", signed_text(t))
        } else {
            format!("(t, s) = ({}, {})", signed_text(t), signed_text(s))
        };
        Line {
            family,
            memberships: vec![Membership {
                family,
                sequence: sequence.into(),
            }],
            shape: LineShape::Gap { t, s },
            label,
            hall_e2_per_h: Some(t),
        }
    }

    /// A Brown–Zak field line at flux per cell φ/φ₀ = `flux`.
    pub fn brown_zak(sequence: impl Into<String>, flux: Rational) -> Line {
        Line {
            family: Family::BrownZak,
            memberships: vec![Membership {
                family: Family::BrownZak,
                sequence: sequence.into(),
            }],
            shape: LineShape::ConstantFlux { flux },
            label: format!("φ/φ₀ = {}", signed_text(flux)),
            hall_e2_per_h: None,
        }
    }

    /// Adds the memberships of `other` not already listed (the primary family stays).
    pub fn merge_memberships(&mut self, other: &Line) {
        for m in &other.memberships {
            if !self.memberships.contains(m) {
                self.memberships.push(m.clone());
            }
        }
    }

    /// True when some membership is in `family`.
    pub fn is_in(&self, family: Family) -> bool {
        self.memberships.iter().any(|m| m.family == family)
    }

    /// (t, s) of a gap line; None for a constant-flux line.
    pub fn ts(&self) -> Option<(Rational, Rational)> {
        match self.shape {
            LineShape::Gap { t, s } => Some((t, s)),
            LineShape::ConstantFlux { .. } => None,
        }
    }

    /// Expected Hall conductance t·e²/h in S (None for a Brown–Zak field).
    pub fn hall_conductance_s(&self) -> Option<f64> {
        self.hall_e2_per_h.map(|t| t.to_f64() * E2_OVER_H)
    }

    /// Density n (m⁻²) of a gap line at field `b_t` (T), given n₀ (m⁻²) when s ≠ 0.
    pub fn density_at(&self, b_t: f64, n0_m2: Option<f64>) -> Result<f64> {
        match self.shape {
            LineShape::Gap { t, s } => {
                let moire = if s.is_zero() {
                    0.0
                } else {
                    s.to_f64() * need_n0(n0_m2, &self.label)?
                };
                Ok(t.to_f64() * E_OVER_H * b_t + moire)
            }
            LineShape::ConstantFlux { .. } => Err(Error::invalid(
                "line",
                format!("{} is a field, not a density line", self.label),
            )),
        }
    }

    /// Field B (T) of a Brown–Zak line, B = (p/q)·φ₀·n₀, given n₀ (m⁻²).
    pub fn field_t(&self, n0_m2: Option<f64>) -> Result<f64> {
        match self.shape {
            LineShape::ConstantFlux { flux } => {
                Ok(flux.to_f64() * FLUX_QUANTUM_H_OVER_E * need_n0(n0_m2, &self.label)?)
            }
            LineShape::Gap { .. } => Err(Error::invalid(
                "line",
                format!("{} is a density line, not a constant field", self.label),
            )),
        }
    }

    /// The (n, B) point of the line at its natural parameter `at`: the field B (T) for a gap
    /// line, the density n (m⁻²) for a constant-flux line.
    pub fn point_nb(&self, at: f64, n0_m2: Option<f64>) -> Result<(f64, f64)> {
        match self.shape {
            LineShape::Gap { .. } => Ok((self.density_at(at, n0_m2)?, at)),
            LineShape::ConstantFlux { .. } => Ok((at, self.field_t(n0_m2)?)),
        }
    }
}

fn need_n0(n0_m2: Option<f64>, what: &str) -> Result<f64> {
    match n0_m2 {
        Some(n0) if n0.is_finite() && n0 > 0.0 => Ok(n0),
        Some(n0) => Err(Error::invalid(
            "n₀",
            format!("{n0} m⁻² is not a finite positive density"),
        )),
        None => Err(Error::invalid(
            "n₀",
            format!("{what} needs the moiré density n₀ (give the moiré cell)"),
        )),
    }
}

/// The axes of a frame: x is density-like, y is field-like in every frame.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
#[serde(tag = "axes", rename_all = "snake_case")]
pub enum FrameAxes {
    /// x = gate voltage V_g (V) through a single-gate model, y = B (T).
    GateField {
        /// The gate model n = α (V_g − V_CNP).
        gate: SingleGate,
    },
    /// x = density n (m⁻²), y = B (T).
    DensityField,
    /// x = filling factor ν = n h/(e B), y = B (T).
    FillingField,
    /// Wannier plane: x = n/n₀, y = φ/φ₀ = B/(φ₀ n₀) (both dimensionless).
    Wannier,
}

/// A drawing plane: its axes and, where lines or axes need it, the moiré density n₀ (m⁻²).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct Frame {
    /// Which quantities the axes show.
    pub axes: FrameAxes,
    /// One carrier per moiré cell n₀ in m⁻², if the device has a moiré cell.
    pub n0_m2: Option<f64>,
}

/// A point (x, y) in frame coordinates (units as the frame's axes).
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FramePoint {
    /// Density-like coordinate.
    pub x: f64,
    /// Field-like coordinate.
    pub y: f64,
}

/// A rectangle in frame coordinates, x_min < x_max and y_min < y_max.
#[derive(Debug, Clone, Copy, PartialEq, Serialize, Deserialize)]
pub struct FrameRect {
    /// Smallest x.
    pub x_min: f64,
    /// Largest x.
    pub x_max: f64,
    /// Smallest y.
    pub y_min: f64,
    /// Largest y.
    pub y_max: f64,
}

impl FrameRect {
    /// A validated rectangle (finite, non-empty in both directions).
    pub fn new(x_min: f64, x_max: f64, y_min: f64, y_max: f64) -> Result<FrameRect> {
        let ok = [x_min, x_max, y_min, y_max].iter().all(|v| v.is_finite())
            && x_min < x_max
            && y_min < y_max;
        if !ok {
            return Err(Error::invalid(
                "frame rectangle",
                format!(
                    "x [{x_min}, {x_max}], y [{y_min}, {y_max}]: expected finite ranges with min < max"
                ),
            ));
        }
        Ok(FrameRect {
            x_min,
            x_max,
            y_min,
            y_max,
        })
    }

    fn contains(&self, p: FramePoint) -> bool {
        let ex = 1e-12 * (self.x_max - self.x_min);
        let ey = 1e-12 * (self.y_max - self.y_min);
        p.x >= self.x_min - ex
            && p.x <= self.x_max + ex
            && p.y >= self.y_min - ey
            && p.y <= self.y_max + ey
    }
}

/// A visible piece of a line in frame coordinates: a polyline (two points when the line is
/// straight in that frame, more when it is curved, as s ≠ 0 lines are in the (ν, B) frame).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Segment {
    /// Points in order of increasing y (or x for a horizontal line).
    pub points: Vec<FramePoint>,
}

/// Points used to draw a curved segment.
const CURVE_POINTS: usize = 49;

impl Frame {
    /// The (V_g, B) frame for a single gate (α must be finite and non-zero).
    pub fn gate_field(gate: SingleGate, n0_m2: Option<f64>) -> Result<Frame> {
        if !gate.alpha_m2_per_v.is_finite() || gate.alpha_m2_per_v == 0.0 {
            return Err(Error::invalid(
                "gate lever arm α",
                format!(
                    "{} m⁻²/V: expected a finite non-zero density per volt",
                    gate.alpha_m2_per_v
                ),
            ));
        }
        if !gate.v_cnp.is_finite() {
            return Err(Error::invalid("V_CNP", "not a finite voltage"));
        }
        Frame::checked(FrameAxes::GateField { gate }, n0_m2)
    }
    /// The (n, B) frame.
    pub fn density_field(n0_m2: Option<f64>) -> Result<Frame> {
        Frame::checked(FrameAxes::DensityField, n0_m2)
    }
    /// The (ν, B) frame.
    pub fn filling_field(n0_m2: Option<f64>) -> Result<Frame> {
        Frame::checked(FrameAxes::FillingField, n0_m2)
    }
    /// The Wannier plane (n/n₀, φ/φ₀); needs n₀ (m⁻²).
    pub fn wannier(n0_m2: f64) -> Result<Frame> {
        Frame::checked(FrameAxes::Wannier, Some(n0_m2))
    }

    fn checked(axes: FrameAxes, n0_m2: Option<f64>) -> Result<Frame> {
        if let Some(n0) = n0_m2 {
            need_n0(Some(n0), "frame")?;
        }
        Ok(Frame { axes, n0_m2 })
    }

    fn n0(&self) -> Result<f64> {
        need_n0(self.n0_m2, "this frame")
    }

    /// Field B (T) at frame height `y`.
    pub fn field_of_y(&self, y: f64) -> Result<f64> {
        match self.axes {
            FrameAxes::Wannier => Ok(y * FLUX_QUANTUM_H_OVER_E * self.n0()?),
            _ => Ok(y),
        }
    }

    /// Frame height y of field `b_t` (T).
    pub fn y_of_field(&self, b_t: f64) -> Result<f64> {
        match self.axes {
            FrameAxes::Wannier => Ok(b_t / (FLUX_QUANTUM_H_OVER_E * self.n0()?)),
            _ => Ok(b_t),
        }
    }

    /// The frame point of physical point (n, B) (m⁻², T). The (ν, B) frame errors at B = 0.
    pub fn to_frame(&self, n_m2: f64, b_t: f64) -> Result<FramePoint> {
        let x = match self.axes {
            FrameAxes::GateField { gate } => gate.gate_for_density(n_m2),
            FrameAxes::DensityField => n_m2,
            FrameAxes::FillingField => {
                if b_t == 0.0 {
                    return Err(Error::invalid(
                        "field",
                        "the filling factor is undefined at B = 0",
                    ));
                }
                n_m2 / (E_OVER_H * b_t)
            }
            FrameAxes::Wannier => n_m2 / self.n0()?,
        };
        Ok(FramePoint {
            x,
            y: self.y_of_field(b_t)?,
        })
    }

    /// The physical point (n, B) (m⁻², T) of frame point `p`.
    pub fn from_frame(&self, p: FramePoint) -> Result<(f64, f64)> {
        let b = self.field_of_y(p.y)?;
        let n = match self.axes {
            FrameAxes::GateField { gate } => gate.density(p.x),
            FrameAxes::DensityField => p.x,
            FrameAxes::FillingField => p.x * E_OVER_H * b,
            FrameAxes::Wannier => p.x * self.n0()?,
        };
        Ok((n, b))
    }

    /// The frame point of `line` at its natural parameter `at` (field B in T for a gap line,
    /// density n in m⁻² for a constant-flux line).
    pub fn evaluate(&self, line: &Line, at: f64) -> Result<FramePoint> {
        let n0 = self.n0_m2;
        let (n, b) = line.point_nb(at, n0)?;
        self.to_frame(n, b)
    }

    /// x of a gap line at frame height y.
    fn gap_x(&self, t: Rational, s: Rational, y: f64) -> Result<f64> {
        let b = self.field_of_y(y)?;
        let n0 = if s.is_zero() { None } else { Some(self.n0()?) };
        let n = t.to_f64() * E_OVER_H * b + s.to_f64() * n0.unwrap_or(0.0);
        match self.axes {
            FrameAxes::FillingField if s.is_zero() => Ok(t.to_f64()),
            _ => Ok(self.to_frame(n, b)?.x),
        }
    }

    /// The visible parts of `line` inside `rect`, in frame coordinates (empty when the line
    /// misses the rectangle).
    pub fn clip(&self, line: &Line, rect: &FrameRect) -> Result<Vec<Segment>> {
        let rect = FrameRect::new(rect.x_min, rect.x_max, rect.y_min, rect.y_max)?;
        match line.shape {
            LineShape::ConstantFlux { .. } => {
                let y = self.y_of_field(line.field_t(self.n0_m2)?)?;
                if y >= rect.y_min && y <= rect.y_max {
                    Ok(vec![Segment {
                        points: vec![
                            FramePoint { x: rect.x_min, y },
                            FramePoint { x: rect.x_max, y },
                        ],
                    }])
                } else {
                    Ok(Vec::new())
                }
            }
            LineShape::Gap { t, s } => self.clip_gap(t, s, &rect),
        }
    }

    fn clip_gap(&self, t: Rational, s: Rational, rect: &FrameRect) -> Result<Vec<Segment>> {
        let curved = matches!(self.axes, FrameAxes::FillingField) && !s.is_zero();
        // Branches of y on which x(y) is continuous and monotone (or constant).
        let mut branches = Vec::new();
        if curved {
            if rect.y_max > 0.0 {
                branches.push((rect.y_min.max(0.0), rect.y_max));
            }
            if rect.y_min < 0.0 {
                branches.push((rect.y_min, rect.y_max.min(0.0)));
            }
        } else {
            branches.push((rect.y_min, rect.y_max));
        }
        let mut out = Vec::new();
        for (a, b) in branches {
            // Candidate y where the line crosses x = x_min or x = x_max, plus the ends.
            let mut ys = vec![a, b];
            if curved {
                // x = t + c/y with c = s n₀ h/e (in T).
                let c = s.to_f64() * self.n0()? / E_OVER_H;
                for xe in [rect.x_min, rect.x_max] {
                    let d = xe - t.to_f64();
                    if d != 0.0 {
                        ys.push(c / d);
                    }
                }
            } else {
                let x0 = self.gap_x(t, s, 0.0)?;
                let k = self.gap_x(t, s, 1.0)? - x0;
                if k != 0.0 {
                    for xe in [rect.x_min, rect.x_max] {
                        ys.push((xe - x0) / k);
                    }
                }
            }
            ys.retain(|y| y.is_finite() && *y >= a && *y <= b);
            ys.sort_by(f64::total_cmp);
            ys.dedup();
            // Visible sub-intervals, merged where they touch.
            let mut spans: Vec<(f64, f64)> = Vec::new();
            for w in ys.windows(2) {
                let (lo, hi) = (w[0], w[1]);
                if hi <= lo {
                    continue;
                }
                let mid = 0.5 * (lo + hi);
                if mid == 0.0 && curved {
                    continue;
                }
                let p = FramePoint {
                    x: self.gap_x(t, s, mid)?,
                    y: mid,
                };
                if rect.contains(p) {
                    match spans.last_mut() {
                        Some(last) if last.1 == lo => last.1 = hi,
                        _ => spans.push((lo, hi)),
                    }
                }
            }
            for (lo, hi) in spans {
                let points = if curved {
                    // x is linear in 1/y: sample evenly in 1/y for evenly spaced x.
                    let (ua, ub) = (1.0 / lo, 1.0 / hi);
                    let mut pts = Vec::with_capacity(CURVE_POINTS);
                    for i in 0..CURVE_POINTS {
                        let f = i as f64 / (CURVE_POINTS - 1) as f64;
                        let y = match i {
                            0 => lo,
                            _ if i == CURVE_POINTS - 1 => hi,
                            _ => 1.0 / (ua + f * (ub - ua)),
                        };
                        pts.push(FramePoint {
                            x: self.gap_x(t, s, y)?,
                            y,
                        });
                    }
                    pts
                } else {
                    vec![
                        FramePoint {
                            x: self.gap_x(t, s, lo)?,
                            y: lo,
                        },
                        FramePoint {
                            x: self.gap_x(t, s, hi)?,
                            y: hi,
                        },
                    ]
                };
                out.push(Segment { points });
            }
        }
        Ok(out)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    fn r(p: i64, q: i64) -> Rational {
        Rational::new(p, q).unwrap()
    }

    const N0: f64 = 5.0e15;

    fn frames() -> Vec<Frame> {
        let gate = SingleGate {
            alpha_m2_per_v: 7.0e14,
            v_cnp: 0.3,
        };
        vec![
            Frame::gate_field(gate, Some(N0)).unwrap(),
            Frame::density_field(Some(N0)).unwrap(),
            Frame::filling_field(Some(N0)).unwrap(),
            Frame::wannier(N0).unwrap(),
        ]
    }

    #[test]
    fn labels_use_typographic_minus_and_json_ascii() {
        let a = Line::gap(Family::Wannier, "test", r(-2, 1), r(5, 2));
        assert_eq!(a.label, "(t, s) = (\u{2212}2, 5/2)");
        let b = Line::gap(Family::CompositeFermion, "test", r(2, 3), Rational::ZERO);
        assert_eq!(b.label, "ν = 2/3");
        let json = serde_json::to_string(&a).unwrap();
        assert!(json.contains("\"t\":\"-2\""), "{json}");
        assert!(json.contains("\"s\":\"5/2\""), "{json}");
        assert!(json.contains("\"family\":\"wannier\""), "{json}");
        let back: Line = serde_json::from_str(&json).unwrap();
        assert_eq!(back, a);
    }

    #[test]
    fn moire_lines_need_n0() {
        let l = Line::gap(Family::Wannier, "test", r(1, 1), r(1, 1));
        assert!(l.density_at(1.0, None).is_err());
        let flat = Frame::density_field(None).unwrap();
        assert!(flat.evaluate(&l, 1.0).is_err());
        // A constant-filling line needs none.
        let nu = Line::gap(Family::Integer, "test", r(2, 1), Rational::ZERO);
        assert!(flat.evaluate(&nu, 1.0).is_ok());
    }

    #[test]
    fn clip_of_a_straight_line_hits_the_rectangle_edges() {
        // ν = 2 in the (n, B) frame: n = 2 (e/h) B. Rectangle n ∈ [0, 2 (e/h) 5 T], B ∈ [0, 10]:
        // visible from B = 0 to B = 5 T (leaves through the right edge).
        let f = Frame::density_field(None).unwrap();
        let l = Line::gap(Family::Integer, "test", r(2, 1), Rational::ZERO);
        let rect = FrameRect::new(0.0, 10.0 * E_OVER_H, 0.0, 10.0).unwrap();
        let segs = f.clip(&l, &rect).unwrap();
        assert_eq!(segs.len(), 1);
        let p = &segs[0].points;
        assert_relative_eq!(p[0].y, 0.0);
        assert_relative_eq!(p[1].y, 5.0, max_relative = 1e-12);
        // A line entirely outside is not drawn.
        let far = Line::gap(Family::Integer, "test", r(-2, 1), Rational::ZERO);
        let rect2 = FrameRect::new(1.0, 10.0 * E_OVER_H, 0.1, 10.0).unwrap();
        assert!(f.clip(&far, &rect2).unwrap().is_empty());
    }

    #[test]
    fn curved_filling_frame_clip_stays_inside() {
        let f = Frame::filling_field(Some(N0)).unwrap();
        let l = Line::gap(Family::Satellite, "test", r(-2, 1), r(4, 1));
        let rect = FrameRect::new(-10.0, 10.0, -12.0, 12.0).unwrap();
        let segs = f.clip(&l, &rect).unwrap();
        assert_eq!(segs.len(), 2, "one piece for each field sign");
        for seg in &segs {
            assert!(seg.points.len() > 2);
            for p in &seg.points {
                assert!(p.x >= -10.0 - 1e-9 && p.x <= 10.0 + 1e-9, "{p:?}");
                assert!(p.y >= -12.0 && p.y <= 12.0 && p.y != 0.0);
                // Each point lies on the line: n(B) back from (ν, B).
                let (n, b) = f.from_frame(*p).unwrap();
                let want = l.density_at(b, Some(N0)).unwrap();
                assert_relative_eq!(n, want, max_relative = 1e-9, epsilon = 1e3);
            }
        }
    }

    #[test]
    fn brown_zak_lines_are_horizontal_in_every_frame() {
        let l = Line::brown_zak("test", r(1, 3));
        for f in frames() {
            let b = l.field_t(f.n0_m2).unwrap();
            let y = f.y_of_field(b).unwrap();
            let rect = FrameRect::new(-1e20, 1e20, y - 1.0, y + 1.0).unwrap();
            let segs = f.clip(&l, &rect).unwrap();
            assert_eq!(segs.len(), 1);
            assert_eq!(segs[0].points[0].y, segs[0].points[1].y);
        }
        let w = Frame::wannier(N0).unwrap();
        assert_relative_eq!(
            w.y_of_field(l.field_t(Some(N0)).unwrap()).unwrap(),
            1.0 / 3.0,
            max_relative = 1e-14
        );
    }

    proptest! {
        #[test]
        fn frame_round_trip(tp in -12i64..=12, tq in 1i64..=5, sp in -8i64..=8, sq in 1i64..=5,
                            b in 0.05f64..40.0, neg in any::<bool>(), fi in 0usize..4) {
            let line = Line::gap(Family::Wannier, "test", r(tp, tq), r(sp, sq));
            let b = if neg { -b } else { b };
            let f = frames()[fi];
            let p = f.evaluate(&line, b).unwrap();
            let (n, bb) = f.from_frame(p).unwrap();
            let want = line.density_at(b, Some(N0)).unwrap();
            prop_assert!((bb - b).abs() <= 1e-12 * b.abs());
            prop_assert!((n - want).abs() <= 1e-11 * want.abs().max(N0));
        }
    }
}

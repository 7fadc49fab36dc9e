//! The overlay style table: how each line family is drawn, predicted or detected, and the
//! marker of each kind of labelled state. The table is data ([`FAMILY_STYLES`],
//! [`STATE_MARKERS`]); figures, the viewer and `fanmark figure --styles` all read it.
//!
//! Design: colours are taken from the companion overlay set (light or mid tones that keep apart
//! for normal and dichromatic vision, each with a black or white outline). A family keeps its
//! colour in both roles; the role shows in the stroke: a *predicted* line is thin and carries
//! the family's dash pattern, a *detected* state is drawn solid, wider and outlined, so a found
//! gap stands out from the grid of expectations behind it. Sizes in pt.

use super::scene::{LineStyle, MarkerShape, MarkerStyle};
use fanmark_core::index::run::StateClass;
use fanmark_core::line::Family;
use fanmark_core::palette::companions;

/// Whether a line is an expectation or a gap found in the data.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Role {
    /// Predicted by a family's rule, not (yet) checked against the data.
    Predicted,
    /// Found in the data by the indexer (or labelled by the user), among the strongest: labelled.
    Detected,
    /// Found in the data but weaker than the labelled ones: solid and thin, no outline, so
    /// the heat map stays readable under dense fans.
    DetectedWeak,
}

/// One row of the family style table.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct FamilyStyle {
    /// The family.
    pub family: Family,
    /// Name of the companion colour (see `fanmark palettes`).
    pub companion: &'static str,
    /// Dash pattern of predicted lines, pt (on, off, …); empty for solid.
    pub dash_pt: &'static [f64],
    /// Width of predicted lines, pt.
    pub predicted_width_pt: f64,
    /// Width of detected states, pt (drawn solid over a wider outline).
    pub detected_width_pt: f64,
    /// What the style is meant to say, for the printed table.
    pub note: &'static str,
}

/// The family style table, one row per family in [`Family::ALL`] order.
pub const FAMILY_STYLES: [FamilyStyle; 6] = [
    FamilyStyle {
        family: Family::Integer,
        companion: "light-yellow",
        dash_pt: &[],
        predicted_width_pt: 0.5,
        detected_width_pt: 0.7,
        note: "solid: the degenerate sequence, the backbone of the fan",
    },
    FamilyStyle {
        family: Family::BrokenSymmetry,
        companion: "light-teal",
        dash_pt: &[3.0, 1.5],
        predicted_width_pt: 0.45,
        detected_width_pt: 0.6,
        note: "even dashes: lifted spin/valley degeneracy",
    },
    FamilyStyle {
        family: Family::CompositeFermion,
        companion: "light-blue",
        dash_pt: &[0.8, 1.2],
        predicted_width_pt: 0.45,
        detected_width_pt: 0.6,
        note: "dots: fractional states, the weakest and most numerous",
    },
    FamilyStyle {
        family: Family::Satellite,
        companion: "red",
        dash_pt: &[4.0, 1.2, 0.8, 1.2],
        predicted_width_pt: 0.45,
        detected_width_pt: 0.6,
        note: "dash-dot: Landau levels of a moiré band edge",
    },
    FamilyStyle {
        family: Family::Wannier,
        companion: "magenta",
        dash_pt: &[2.0, 1.0, 2.0, 3.0],
        predicted_width_pt: 0.45,
        detected_width_pt: 0.6,
        note: "paired dashes: Chern-insulator (t, s) lines",
    },
    FamilyStyle {
        family: Family::BrownZak,
        companion: "blue",
        dash_pt: &[6.0, 2.0],
        predicted_width_pt: 0.5,
        detected_width_pt: 0.6,
        note: "long dashes: horizontal fields of rational flux per cell",
    },
];

/// One row of the state marker table.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct StateMarker {
    /// The kind of state.
    pub kind: StateClass,
    /// Its family for the colour (a state's colour is its family's).
    pub family: Family,
    /// Marker shape.
    pub shape: MarkerShape,
    /// Marker size, pt.
    pub size_pt: f64,
}

/// The marker of each kind of labelled state: distinct shapes, the family's colour.
pub const STATE_MARKERS: [StateMarker; 4] = [
    StateMarker {
        kind: StateClass::Integer,
        family: Family::Integer,
        shape: MarkerShape::Circle,
        size_pt: 4.0,
    },
    StateMarker {
        kind: StateClass::BrokenSymmetry,
        family: Family::BrokenSymmetry,
        shape: MarkerShape::Square,
        size_pt: 3.8,
    },
    StateMarker {
        kind: StateClass::Fractional,
        family: Family::CompositeFermion,
        shape: MarkerShape::Diamond,
        size_pt: 4.4,
    },
    StateMarker {
        kind: StateClass::Wannier,
        family: Family::Wannier,
        shape: MarkerShape::Triangle,
        size_pt: 4.6,
    },
];

/// The table row of `family`.
pub fn family_style(family: Family) -> &'static FamilyStyle {
    FAMILY_STYLES
        .iter()
        .find(|s| s.family == family)
        .unwrap_or(&FAMILY_STYLES[0])
}

/// Fill and outline colours of `family` (from the companion set, by name; by position when a
/// name is missing so a figure is always drawable).
pub fn family_colours(family: Family) -> ([u8; 3], [u8; 3]) {
    let set = companions();
    let row = family_style(family);
    let pos = FAMILY_STYLES
        .iter()
        .position(|s| s.family == family)
        .unwrap_or(0);
    set.iter()
        .find(|c| c.name == row.companion)
        .or_else(|| set.get(pos % set.len().max(1)))
        .map(|c| (c.fill, c.outline))
        .unwrap_or(([255, 255, 255], [0, 0, 0]))
}

/// The stroke of a `family` line in `role`.
pub fn line_style(family: Family, role: Role) -> LineStyle {
    let row = family_style(family);
    let (fill, outline) = family_colours(family);
    match role {
        Role::Predicted => LineStyle {
            color: fill,
            width_pt: row.predicted_width_pt,
            dash_pt: row.dash_pt.to_vec(),
            outline: None,
        },
        Role::DetectedWeak => LineStyle {
            color: fill,
            width_pt: row.predicted_width_pt,
            dash_pt: Vec::new(),
            outline: None,
        },
        Role::Detected => LineStyle {
            color: fill,
            width_pt: row.detected_width_pt,
            dash_pt: Vec::new(),
            outline: Some(outline),
        },
    }
}

/// The table row of a state kind.
pub fn state_marker_row(kind: StateClass) -> &'static StateMarker {
    STATE_MARKERS
        .iter()
        .find(|m| m.kind == kind)
        .unwrap_or(&STATE_MARKERS[0])
}

/// The marker of a labelled state of `kind`.
pub fn state_marker(kind: StateClass) -> MarkerStyle {
    let row = state_marker_row(kind);
    let (fill, outline) = family_colours(row.family);
    MarkerStyle {
        shape: row.shape,
        size_pt: row.size_pt,
        fill,
        edge: outline,
    }
}

/// The family whose colour a detected state of `kind` takes.
pub fn state_family(kind: StateClass) -> Family {
    state_marker_row(kind).family
}

/// Lower-case name of a state kind as written in the index JSON.
pub fn state_kind_name(kind: StateClass) -> &'static str {
    match kind {
        StateClass::Integer => "integer",
        StateClass::BrokenSymmetry => "broken_symmetry",
        StateClass::Fractional => "fractional",
        StateClass::Wannier => "wannier",
    }
}

fn shape_name(s: MarkerShape) -> &'static str {
    match s {
        MarkerShape::Circle => "circle",
        MarkerShape::Square => "square",
        MarkerShape::Triangle => "triangle",
        MarkerShape::Diamond => "diamond",
        MarkerShape::Cross => "cross",
    }
}

fn hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

fn dash_text(d: &[f64]) -> String {
    if d.is_empty() {
        "solid".into()
    } else {
        d.iter()
            .map(|v| format!("{v}"))
            .collect::<Vec<_>>()
            .join(" ")
    }
}

/// The style table as aligned text, for `fanmark figure --styles`.
pub fn styles_text() -> String {
    let mut s = String::from(
        "line families (predicted: thin, dashed; found: solid, the labelled ones outlined)\n",
    );
    s.push_str(&format!(
        "  {:<18} {:<13} {:<8} {:<15} {:>9} {:>9}  {}\n",
        "family", "colour", "fill", "dash (pt)", "pred. pt", "det. pt", "meaning"
    ));
    for r in &FAMILY_STYLES {
        let (fill, outline) = family_colours(r.family);
        s.push_str(&format!(
            "  {:<18} {:<13} {:<8} {:<15} {:>9} {:>9}  {} (outline {})\n",
            r.family.name(),
            r.companion,
            hex(fill),
            dash_text(r.dash_pt),
            r.predicted_width_pt,
            r.detected_width_pt,
            r.note,
            hex(outline)
        ));
    }
    s.push_str("\nlabelled states (marker at the label's end of the line)\n");
    s.push_str(&format!(
        "  {:<18} {:<10} {:>8}  {}\n",
        "kind", "marker", "size pt", "colour of"
    ));
    for m in &STATE_MARKERS {
        s.push_str(&format!(
            "  {:<18} {:<10} {:>8}  {}\n",
            state_kind_name(m.kind),
            shape_name(m.shape),
            m.size_pt,
            m.family.name()
        ));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use fanmark_core::palette::delta_e_seen;

    #[test]
    fn every_family_has_its_own_colour_and_stroke() {
        for (row, fam) in FAMILY_STYLES.iter().zip(Family::ALL) {
            assert_eq!(row.family, fam, "table order follows Family::ALL");
            assert!(
                companions().iter().any(|c| c.name == row.companion),
                "{} names a companion colour that does not exist",
                row.companion
            );
        }
        for (i, a) in FAMILY_STYLES.iter().enumerate() {
            for b in &FAMILY_STYLES[i + 1..] {
                let (ca, _) = family_colours(a.family);
                let (cb, _) = family_colours(b.family);
                assert!(
                    delta_e_seen(ca, cb, None) > 0.1,
                    "{} and {} look alike",
                    a.family,
                    b.family
                );
                assert_ne!(a.dash_pt, b.dash_pt, "dash patterns must differ too");
            }
        }
    }

    #[test]
    fn detected_states_stand_out_from_predictions() {
        for f in Family::ALL {
            let p = line_style(f, Role::Predicted);
            let d = line_style(f, Role::Detected);
            assert_eq!(p.color, d.color);
            assert!(d.width_pt > p.width_pt);
            assert!(d.dash_pt.is_empty() && d.outline.is_some() && p.outline.is_none());
            let w = line_style(f, Role::DetectedWeak);
            assert!(w.dash_pt.is_empty() && w.outline.is_none() && w.width_pt < d.width_pt);
            // The outline must contrast with the fill (ΔE_OK well above the fill spacing).
            let o = d.outline.unwrap();
            assert!(delta_e_seen(d.color, o, None) > 0.4);
        }
        let shapes: Vec<MarkerShape> = STATE_MARKERS.iter().map(|m| m.shape).collect();
        for i in 0..shapes.len() {
            assert!(
                !shapes[i + 1..].contains(&shapes[i]),
                "marker shapes repeat"
            );
        }
        assert_eq!(
            state_marker(StateClass::Fractional).fill,
            family_colours(Family::CompositeFermion).0
        );
        let t = styles_text();
        for f in Family::ALL {
            assert!(t.contains(f.name()), "table lacks {f}");
        }
        assert!(t.contains("diamond") && t.contains("#"));
    }
}

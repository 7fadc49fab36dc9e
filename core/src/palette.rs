//! The project's own heat-map palettes and the companion set of overlay colours.
//!
//! Every palette is generated here by a stated recipe, never read from a file at run time:
//! a smooth path of targets (CIE L*, Oklab chroma and hue), each target made displayable by
//! reducing chroma at fixed lightness and hue, then rounded to 8-bit sRGB by a quantiser that
//! keeps the lightness order exact (CIE L* strictly rising along a sequential palette and along
//! each half of a diverging one, also as seen with protanopia and deuteranopia).
//! `fanmark palettes --write palettes/` writes the same tables as JSON for other programs.
//!
//! The companion set is 9 categorical colours for line families drawn over heat maps, chosen in
//! Oklab to stay mutually distinct for normal vision and under simulated protanopia and
//! deuteranopia; each carries an outline colour (black or white) so it reads on every palette.

use crate::colour::{
    delta_e_ok, gamut_map_oklch, lightness, linear_srgb_to_oklab, linear_to_srgb8, oklab_to_oklch,
    simulate_deficiency, srgb8_to_linear, srgb8_to_oklab, srgb_encode, to_hex, Deficiency,
    LinearRgb,
};
use crate::error::{Error, Result};
use serde::{Deserialize, Serialize};
use std::path::Path;
use std::sync::OnceLock;

/// Number of colours in every palette table.
pub const PALETTE_LEN: usize = 256;

/// What a palette encodes.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum PaletteKind {
    /// Magnitudes: lightness rises monotonically from the first colour to the last.
    Sequential,
    /// Signed values: lightness is symmetric about the centre (zero) and monotone on each half.
    Diverging,
}

impl PaletteKind {
    /// Lower-case name as written in files.
    pub fn name(self) -> &'static str {
        match self {
            PaletteKind::Sequential => "sequential",
            PaletteKind::Diverging => "diverging",
        }
    }
}

/// A heat-map palette: a table of [`PALETTE_LEN`] 8-bit sRGB colours for data values scaled to
/// t ∈ [0, 1] (t = 0 the first colour; for a diverging palette t = 0.5 is zero).
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Palette {
    name: String,
    kind: PaletteKind,
    purpose: String,
    recipe: String,
    #[serde(with = "hex_table")]
    colours: Vec<[u8; 3]>,
}

impl Palette {
    /// A palette from its parts; `colours` must hold exactly [`PALETTE_LEN`] entries.
    pub fn new(
        name: impl Into<String>,
        kind: PaletteKind,
        purpose: impl Into<String>,
        recipe: impl Into<String>,
        colours: Vec<[u8; 3]>,
    ) -> Result<Palette> {
        if colours.len() != PALETTE_LEN {
            return Err(Error::invalid(
                "palette colours",
                format!("expected {PALETTE_LEN} colours, found {}", colours.len()),
            ));
        }
        Ok(Palette {
            name: name.into(),
            kind,
            purpose: purpose.into(),
            recipe: recipe.into(),
            colours,
        })
    }

    /// The palette's name (the project's own).
    pub fn name(&self) -> &str {
        &self.name
    }
    /// Sequential or diverging.
    pub fn kind(&self) -> PaletteKind {
        self.kind
    }
    /// What the palette is meant for, in one sentence.
    pub fn purpose(&self) -> &str {
        &self.purpose
    }
    /// The method and parameters that generated the table.
    pub fn recipe(&self) -> &str {
        &self.recipe
    }
    /// The table of 8-bit sRGB colours, first (t = 0) to last (t = 1).
    pub fn colours(&self) -> &[[u8; 3]] {
        &self.colours
    }

    /// The colour at t ∈ [0, 1] by linear interpolation between neighbouring table entries
    /// (in encoded sRGB, fixed point with 1/256 steps between entries, rounded). t outside
    /// [0, 1] is clamped; NaN gives the first colour, so callers should draw missing data with
    /// their own colour before sampling.
    #[inline]
    pub fn sample(&self, t: f64) -> [u8; 3] {
        let n = self.colours.len();
        if n == 0 {
            return [0; 3];
        }
        let t = if t.is_nan() { 0.0 } else { t.clamp(0.0, 1.0) };
        // Position in 1/256 steps of the table; t ∈ [0, 1] keeps it in range.
        let x = (t * ((n - 1) * 256) as f64 + 0.5) as usize;
        let i = (x >> 8).min(n - 1);
        let f = (x & 255) as u32;
        let j = (i + 1).min(n - 1);
        let (a, b) = (self.colours[i], self.colours[j]);
        let mix = |k: usize| ((u32::from(a[k]) * (256 - f) + u32::from(b[k]) * f + 128) >> 8) as u8;
        [mix(0), mix(1), mix(2)]
    }

    /// The same palette run backwards (last colour first), named `<name>-reversed`.
    pub fn reversed(&self) -> Palette {
        let mut colours = self.colours.clone();
        colours.reverse();
        Palette {
            name: format!("{}-reversed", self.name),
            kind: self.kind,
            purpose: self.purpose.clone(),
            recipe: format!("{} Then reversed.", self.recipe),
            colours,
        }
    }

    /// CIE L* (0–100) of every table entry, first to last.
    pub fn lightness_profile(&self) -> Vec<f64> {
        self.colours
            .iter()
            .map(|&c| lightness(srgb8_to_linear(c)))
            .collect()
    }

    /// The palette as the project's JSON text (pretty, one colour per line, final newline).
    pub fn to_json(&self) -> String {
        let mut s = serde_json::to_string_pretty(self).unwrap_or_default();
        s.push('\n');
        s
    }

    /// Parse a palette from JSON text; `path` names the source in errors, which give the line
    /// and column and say what was expected (e.g. a `#rrggbb` colour, or 256 of them).
    pub fn from_json(text: &str, path: &Path) -> Result<Palette> {
        serde_json::from_str(text).map_err(|source| Error::Json {
            path: path.to_path_buf(),
            source,
        })
    }

    /// Read a palette JSON file.
    pub fn read(path: &Path) -> Result<Palette> {
        let text = std::fs::read_to_string(path).map_err(|source| Error::Io {
            path: path.to_path_buf(),
            source,
        })?;
        Palette::from_json(&text, path)
    }
}

/// Serde form of a colour table: a list of exactly [`PALETTE_LEN`] `#rrggbb` strings.
mod hex_table {
    use super::PALETTE_LEN;
    use crate::colour::{parse_hex, to_hex};
    use serde::de::Error as _;
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(colours: &[[u8; 3]], s: S) -> Result<S::Ok, S::Error> {
        s.collect_seq(colours.iter().map(|&c| to_hex(c)))
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<Vec<[u8; 3]>, D::Error> {
        let texts = Vec::<String>::deserialize(d)?;
        if texts.len() != PALETTE_LEN {
            return Err(D::Error::custom(format!(
                "field `colours`: expected {PALETTE_LEN} colours, found {}",
                texts.len()
            )));
        }
        texts
            .iter()
            .enumerate()
            .map(|(i, t)| {
                parse_hex(t).ok_or_else(|| {
                    D::Error::custom(format!(
                        "field `colours`, entry {i}: `{t}` is not a #rrggbb hex colour"
                    ))
                })
            })
            .collect()
    }
}

// ---------------------------------------------------------------------------------------------
// Generation.

/// A path of targets t ∈ [0, 1] → (CIE L*, Oklab chroma, Oklab hue in degrees).
#[derive(Debug, Clone, Copy)]
enum Path3 {
    /// L* linear from `l.0` to `l.1`; hue linear from `h.0` to `h.1` (degrees, may pass 360);
    /// chroma `c.0 + (c.1 − c.0)·t + bulge·sin(πt)`.
    Arc {
        l: (f64, f64),
        h: (f64, f64),
        c: (f64, f64),
        bulge: f64,
    },
    /// L* linear from `l.0` to `l.1`; (a, b) on the straight Oklab segment between the ends
    /// given as (chroma, hue in degrees).
    Line {
        l: (f64, f64),
        start: (f64, f64),
        end: (f64, f64),
    },
    /// Two arms meeting at a neutral centre: with u = |2t − 1|, L* = centre − (centre − end)·u,
    /// chroma `c·(1 − (1 − u)²)`, hue `h_low` for t < ½ and `h_high` for t > ½.
    Diverging {
        l_end: f64,
        l_centre: f64,
        h_low: f64,
        h_high: f64,
        c: f64,
    },
    /// Every 8-bit grey level in order.
    Grey,
}

impl Path3 {
    /// The target (L*, Oklab a, Oklab b) at t.
    fn target(&self, t: f64) -> (f64, f64, f64) {
        let lerp = |a: f64, b: f64| a + (b - a) * t;
        let polar = |c: f64, h: f64| {
            let (s, co) = h.to_radians().sin_cos();
            (c * co, c * s)
        };
        match *self {
            Path3::Arc { l, h, c, bulge } => {
                let chroma = lerp(c.0, c.1) + bulge * (std::f64::consts::PI * t).sin();
                let (a, b) = polar(chroma, lerp(h.0, h.1));
                (lerp(l.0, l.1), a, b)
            }
            Path3::Line { l, start, end } => {
                let (a0, b0) = polar(start.0, start.1);
                let (a1, b1) = polar(end.0, end.1);
                (lerp(l.0, l.1), lerp(a0, a1), lerp(b0, b1))
            }
            Path3::Diverging {
                l_end,
                l_centre,
                h_low,
                h_high,
                c,
            } => {
                let u = (2.0 * t - 1.0).abs();
                let chroma = c * (1.0 - (1.0 - u) * (1.0 - u));
                let h = if t < 0.5 { h_low } else { h_high };
                let (a, b) = polar(chroma, h);
                (l_centre - (l_centre - l_end) * u, a, b)
            }
            Path3::Grey => (100.0 * t, 0.0, 0.0),
        }
    }

    fn recipe(&self, observers: &[Option<Deficiency>]) -> String {
        let who: Vec<&str> = observers.iter().flatten().map(|d| d.name()).collect();
        let who = match who.len() {
            0 => String::new(),
            1 => format!(" (also under simulated {})", who[0]),
            n => format!(
                " (also under simulated {} and {})",
                who[..n - 1].join(", "),
                who[n - 1]
            ),
        };
        let common = format!(
            "Each target is made displayable by lowering chroma at fixed lightness and hue \
             until it fits in sRGB (bisection), its Oklab lightness chosen so that CIE L* hits \
             the target; 8-bit rounding picks, among the nearby 8-bit colours, the one nearest \
             in Oklab that keeps L* strictly rising{who}."
        );
        match *self {
            Path3::Arc { l, h, c, bulge } => format!(
                "256 targets at t = i/255: CIE L* linear {:.0} → {:.0}; OkLCh hue linear \
                 {:.0}° → {:.0}° (mod 360); Oklab chroma {:.3} + ({:.3} − {:.3})·t + {:.3}·sin(πt). {common}",
                l.0, l.1, h.0, h.1, c.0, c.1, c.0, bulge
            ),
            Path3::Line { l, start, end } => format!(
                "256 targets at t = i/255: CIE L* linear {:.0} → {:.0}; Oklab (a, b) on the \
                 straight segment from chroma {:.3} at hue {:.0}° to chroma {:.3} at hue {:.0}°, \
                 passing close to neutral in the middle. {common}",
                l.0, l.1, start.0, start.1, end.0, end.1
            ),
            Path3::Diverging {
                l_end,
                l_centre,
                h_low,
                h_high,
                c,
            } => format!(
                "256 targets at t = i/255, u = |2t − 1|: CIE L* = {:.0} − ({:.0} − {:.0})·u \
                 (symmetric, neutral {} centre at t = ½); OkLCh hue {:.0}° below the centre and \
                 {:.0}° above; Oklab chroma {:.3}·(1 − (1 − u)²). {} Each half is rounded from \
                 its dark end {}.",
                l_centre,
                l_centre,
                l_end,
                if l_centre > l_end { "light" } else { "dark" },
                h_low,
                h_high,
                c,
                common,
                if l_centre > l_end {
                    "towards the centre"
                } else {
                    "(the centre) outwards"
                }
            ),
            Path3::Grey => "All 256 8-bit grey levels 0 → 255 in order (R = G = B). CIE L* runs \
                            0 → 100, nearly evenly spaced because the sRGB transfer curve is \
                            close to perceptual."
                .to_string(),
        }
    }
}

/// The displayable linear sRGB colour with CIE L* = `l_star` at Oklab chroma `c` and hue `h`
/// (chroma lowered where sRGB cannot hold it). Bisection on Oklab lightness.
fn solve_target(l_star: f64, a: f64, b: f64) -> LinearRgb {
    let lch = oklab_to_oklch([0.5, a, b]);
    let (c, h) = (lch[1], lch[2]);
    let (mut lo, mut hi) = (0.0, 1.0);
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if lightness(gamut_map_oklch(mid, c, h)) < l_star {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    gamut_map_oklch(0.5 * (lo + hi), c, h)
}

/// Observers whose lightness order the quantiser keeps in every palette.
const ORDER_OBSERVERS: [Option<Deficiency>; 3] = [
    None,
    Some(Deficiency::Protanopia),
    Some(Deficiency::Deuteranopia),
];

/// The same plus tritanopia, for the palette designed for colour-vision deficiency.
const ORDER_OBSERVERS_ALL: [Option<Deficiency>; 4] = [
    None,
    Some(Deficiency::Protanopia),
    Some(Deficiency::Deuteranopia),
    Some(Deficiency::Tritanopia),
];

/// Smallest L* rise between neighbouring entries that the quantiser accepts.
const MIN_LIGHTNESS_STEP: f64 = 0.01;

fn seen_lightness(c: LinearRgb, who: Option<Deficiency>) -> f64 {
    match who {
        None => lightness(c),
        Some(d) => lightness(simulate_deficiency(c, d)),
    }
}

/// Round a run of targets (in rising-lightness order) to 8-bit colours that keep L* strictly
/// rising for every observer in `observers`; among the admissible 8-bit colours near each
/// target the one nearest in Oklab wins.
fn quantise_rising(targets: &[LinearRgb], observers: &[Option<Deficiency>]) -> Vec<[u8; 3]> {
    let mut prev = vec![f64::NEG_INFINITY; observers.len()];
    let mut out = Vec::with_capacity(targets.len());
    for &t in targets {
        let goal = linear_srgb_to_oklab(t);
        let base = t.map(|v| (srgb_encode(v.clamp(0.0, 1.0)) * 255.0).floor() as i32);
        let mut best: Option<([u8; 3], f64, Vec<f64>)> = None;
        'radius: for radius in 1..=4i32 {
            for dr in (1 - radius)..=radius {
                for dg in (1 - radius)..=radius {
                    for db in (1 - radius)..=radius {
                        let cand = [base[0] + dr, base[1] + dg, base[2] + db];
                        if cand.iter().any(|&v| !(0..=255).contains(&v)) {
                            continue;
                        }
                        let c8 = cand.map(|v| v as u8);
                        let lin = srgb8_to_linear(c8);
                        let keys: Vec<f64> =
                            observers.iter().map(|&w| seen_lightness(lin, w)).collect();
                        if keys
                            .iter()
                            .zip(&prev)
                            .any(|(k, p)| *k < p + MIN_LIGHTNESS_STEP)
                        {
                            continue;
                        }
                        let d = delta_e_ok(goal, linear_srgb_to_oklab(lin));
                        if best.as_ref().is_none_or(|(_, bd, _)| d < *bd) {
                            best = Some((c8, d, keys));
                        }
                    }
                }
            }
            if best.is_some() {
                break 'radius;
            }
        }
        let (c8, keys) = match best {
            Some((c8, _, keys)) => (c8, keys),
            None => {
                let c8 = linear_to_srgb8(t);
                let lin = srgb8_to_linear(c8);
                let keys = observers.iter().map(|&w| seen_lightness(lin, w)).collect();
                (c8, keys)
            }
        };
        prev = keys;
        out.push(c8);
    }
    out
}

/// The unrounded colours of a path, t = i/255.
fn path_targets(path: &Path3) -> Vec<LinearRgb> {
    (0..PALETTE_LEN)
        .map(|i| {
            let t = i as f64 / (PALETTE_LEN - 1) as f64;
            let (l, a, b) = path.target(t);
            solve_target(l, a, b)
        })
        .collect()
}

/// The 8-bit table of a path, keeping the lightness order for `observers`.
fn path_colours(path: &Path3, observers: &[Option<Deficiency>]) -> Vec<[u8; 3]> {
    match path {
        Path3::Grey => (0..PALETTE_LEN).map(|i| [i as u8; 3]).collect(),
        Path3::Diverging {
            l_end, l_centre, ..
        } => {
            let targets = path_targets(path);
            let half = PALETTE_LEN / 2;
            let mut low = targets[..half].to_vec();
            let mut high = targets[half..].to_vec();
            // Round each half in rising-lightness order: from the ends inwards when the centre
            // is light, from the centre outwards when it is dark.
            let light_centre = l_centre > l_end;
            if light_centre {
                high.reverse();
            } else {
                low.reverse();
            }
            let mut low = quantise_rising(&low, observers);
            let mut high = quantise_rising(&high, observers);
            if light_centre {
                high.reverse();
            } else {
                low.reverse();
            }
            low.into_iter().chain(high).collect()
        }
        _ => quantise_rising(&path_targets(path), observers),
    }
}

struct Design {
    name: &'static str,
    kind: PaletteKind,
    purpose: &'static str,
    path: Path3,
    /// Observers whose lightness order the rounding keeps.
    observers: &'static [Option<Deficiency>],
}

/// Name of the sequential palette for resistance maps.
pub const KILN: &str = "kiln";
/// Name of the diverging palette for signed maps.
pub const SEESAW: &str = "seesaw";
/// Name of the diverging palette with a dark centre.
pub const UNDERTOW: &str = "undertow";
/// Name of the blue–yellow sequential palette for colour-vision deficiency.
pub const HARBOUR: &str = "harbour";
/// Name of the grey ramp.
pub const ASH: &str = "ash";

fn designs() -> [Design; 5] {
    [
        Design {
            name: KILN,
            kind: PaletteKind::Sequential,
            purpose: "Magnitudes such as R_xx, ρ_xx or |dR/dV_g|: dark indigo through plum and \
                      copper to pale straw, so that levels read both by lightness and by hue.",
            path: Path3::Arc {
                l: (8.0, 97.0),
                h: (295.0, 455.0),
                c: (0.07, 0.10),
                bulge: 0.10,
            },
            observers: &ORDER_OBSERVERS,
        },
        Design {
            name: SEESAW,
            kind: PaletteKind::Diverging,
            purpose: "Signed quantities such as R_xy, σ_xy, dR_xx/dn or a second derivative: \
                      deep blue for negative, copper-orange for positive, a light neutral at \
                      zero.",
            path: Path3::Diverging {
                l_end: 30.0,
                l_centre: 97.0,
                h_low: 255.0,
                h_high: 50.0,
                c: 0.16,
            },
            observers: &ORDER_OBSERVERS,
        },
        Design {
            name: UNDERTOW,
            kind: PaletteKind::Diverging,
            purpose: "Signed quantities where zero should recede, e.g. a transconductance map \
                      whose plateaus are dark and whose steps glow: sky blue for negative, \
                      amber for positive, near-black at zero.",
            path: Path3::Diverging {
                l_end: 88.0,
                l_centre: 12.0,
                h_low: 240.0,
                h_high: 75.0,
                c: 0.14,
            },
            observers: &ORDER_OBSERVERS,
        },
        Design {
            name: HARBOUR,
            kind: PaletteKind::Sequential,
            purpose: "Magnitudes for readers with colour-vision deficiency, or for any figure \
                      that may be seen so: dark blue through grey to light yellow, the \
                      blue–yellow axis that protanopes and deuteranopes keep.",
            path: Path3::Line {
                l: (12.0, 95.0),
                start: (0.13, 262.0),
                end: (0.16, 100.0),
            },
            observers: &ORDER_OBSERVERS_ALL,
        },
        Design {
            name: ASH,
            kind: PaletteKind::Sequential,
            purpose: "Neutral grey ramp for print, for overlays in colour, or when hue would \
                      distract: black to white.",
            path: Path3::Grey,
            observers: &ORDER_OBSERVERS,
        },
    ]
}

fn generate(d: &Design) -> Palette {
    Palette {
        name: d.name.to_string(),
        kind: d.kind,
        purpose: d.purpose.to_string(),
        recipe: d.path.recipe(d.observers),
        colours: path_colours(&d.path, d.observers),
    }
}

/// The built-in palettes, generated once on first use: `kiln`, `seesaw`, `undertow`,
/// `harbour`, `ash`.
pub fn builtin() -> &'static [Palette] {
    static PALETTES: OnceLock<Vec<Palette>> = OnceLock::new();
    PALETTES.get_or_init(|| designs().iter().map(generate).collect())
}

/// A built-in palette by name; a name ending in `-reversed` gives it reversed.
pub fn by_name(name: &str) -> Result<Palette> {
    let (base, rev) = match name.strip_suffix("-reversed") {
        Some(b) => (b, true),
        None => (name, false),
    };
    match builtin().iter().find(|p| p.name == base) {
        Some(p) if rev => Ok(p.reversed()),
        Some(p) => Ok(p.clone()),
        None => Err(Error::invalid(
            "palette",
            format!(
                "`{name}` is not a palette; known: {} (each also as <name>-reversed)",
                builtin()
                    .iter()
                    .map(|p| p.name.as_str())
                    .collect::<Vec<_>>()
                    .join(", ")
            ),
        )),
    }
}

// ---------------------------------------------------------------------------------------------
// Companion set.

/// One overlay colour of the companion set: a fill for lines and markers and an outline (black
/// or white) drawn around it so it reads on any background.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
pub struct Companion {
    /// Short descriptive name (hue word and lightness), unique within the set.
    pub name: String,
    /// Fill colour, 8-bit sRGB.
    #[serde(with = "hex_one")]
    pub fill: [u8; 3],
    /// Outline colour, 8-bit sRGB: whichever of black and white differs more from the fill.
    #[serde(with = "hex_one")]
    pub outline: [u8; 3],
}

mod hex_one {
    use crate::colour::{parse_hex, to_hex};
    use serde::de::Error as _;
    use serde::{Deserialize, Deserializer, Serializer};

    pub fn serialize<S: Serializer>(c: &[u8; 3], s: S) -> Result<S::Ok, S::Error> {
        s.serialize_str(&to_hex(*c))
    }

    pub fn deserialize<'de, D: Deserializer<'de>>(d: D) -> Result<[u8; 3], D::Error> {
        let t = String::deserialize(d)?;
        parse_hex(&t).ok_or_else(|| D::Error::custom(format!("`{t}` is not a #rrggbb hex colour")))
    }
}

/// Number of colours in the companion set.
pub const COMPANION_COUNT: usize = 9;

/// Oklab lightness range of the companion candidates.
const COMPANION_L: (f64, f64) = (0.50, 0.85);
/// Smallest Oklab chroma of a companion candidate, and the cap used when spreading them.
const COMPANION_CHROMA: f64 = 0.12;
/// First companion: a mid blue.
const COMPANION_SEED: [u8; 3] = [0x00, 0x78, 0xff];

/// Guaranteed minimum ΔE_OK between any two companion fills for normal vision.
pub const COMPANION_MIN_DELTA_E: f64 = 0.11;

/// Guaranteed minimum ΔE_OK between any two companion fills as seen with protanopia or with
/// deuteranopia (Machado et al. 2009 simulation, severity 1.0).
pub const COMPANION_MIN_DELTA_E_DICHROMAT: f64 = 0.10;

/// Guaranteed minimum ΔE_OK between a companion's fill and its outline.
pub const COMPANION_MIN_OUTLINE_DELTA_E: f64 = 0.45;

/// Oklab distance between two 8-bit colours as seen by an observer (`None` = normal vision).
pub fn delta_e_seen(a: [u8; 3], b: [u8; 3], who: Option<Deficiency>) -> f64 {
    let see = |c: [u8; 3]| {
        let lin = srgb8_to_linear(c);
        linear_srgb_to_oklab(match who {
            None => lin,
            Some(d) => simulate_deficiency(lin, d),
        })
    };
    delta_e_ok(see(a), see(b))
}

fn hue_word(c: [u8; 3]) -> String {
    let lch = oklab_to_oklch(srgb8_to_oklab(c));
    let h = lch[2];
    let word = match h {
        h if !(20.0..345.0).contains(&h) => "rose",
        h if h < 45.0 => "red",
        h if h < 80.0 => "orange",
        h if h < 115.0 => "yellow",
        h if h < 160.0 => "green",
        h if h < 215.0 => "teal",
        h if h < 275.0 => "blue",
        h if h < 310.0 => "violet",
        _ => "magenta",
    };
    let tone = if lch[0] < 0.6 {
        "dark-"
    } else if lch[0] > 0.8 {
        "light-"
    } else {
        ""
    };
    format!("{tone}{word}")
}

/// Greedy farthest-point selection over a grid of 8-bit colours (every channel in steps of 15)
/// with Oklab L in [0.50, 0.85] and chroma ≥ 0.12: start from mid blue #0078ff, then add the
/// candidate whose smallest distance to the chosen ones is largest (first in grid order on
/// ties). The distance is the least of the normal, protanopic and deuteranopic ΔE_OK, the
/// normal one measured with chroma capped at 0.12 so that hue, not extreme chroma, sets the
/// spread (capping is a projection onto a convex set, so true distances are never smaller).
fn choose_companions() -> Vec<Companion> {
    let mut cands: Vec<([u8; 3], f64)> = Vec::new();
    for r in (0..=255u16).step_by(15) {
        for g in (0..=255u16).step_by(15) {
            for b in (0..=255u16).step_by(15) {
                let c = [r as u8, g as u8, b as u8];
                let lch = oklab_to_oklch(srgb8_to_oklab(c));
                if (COMPANION_L.0..=COMPANION_L.1).contains(&lch[0]) && lch[1] >= COMPANION_CHROMA {
                    cands.push((c, lch[1]));
                }
            }
        }
    }
    let capped = |c: [u8; 3]| {
        let lab = srgb8_to_oklab(c);
        let chroma = lab[1].hypot(lab[2]);
        let f = if chroma > COMPANION_CHROMA {
            COMPANION_CHROMA / chroma
        } else {
            1.0
        };
        [lab[0], lab[1] * f, lab[2] * f]
    };
    let dist = |a: [u8; 3], b: [u8; 3]| {
        let normal = delta_e_ok(capped(a), capped(b));
        ORDER_OBSERVERS[1..]
            .iter()
            .map(|&w| delta_e_seen(a, b, w))
            .fold(normal, f64::min)
    };
    // Seed: the candidate nearest to a mid blue, a hue every observer keeps.
    let seed = srgb8_to_oklab(COMPANION_SEED);
    let mut chosen: Vec<[u8; 3]> = Vec::new();
    if let Some(&(first, _)) = cands.iter().min_by(|x, y| {
        let dx = delta_e_ok(srgb8_to_oklab(x.0), seed);
        let dy = delta_e_ok(srgb8_to_oklab(y.0), seed);
        dx.total_cmp(&dy)
    }) {
        chosen.push(first);
    }
    let mut nearest: Vec<f64> = cands
        .iter()
        .map(|&(c, _)| chosen.first().map_or(f64::INFINITY, |&f| dist(c, f)))
        .collect();
    while chosen.len() < COMPANION_COUNT && !cands.is_empty() {
        let mut bi = 0;
        for i in 1..cands.len() {
            if nearest[i] > nearest[bi] {
                bi = i;
            }
        }
        let pick = cands[bi].0;
        chosen.push(pick);
        for (i, &(c, _)) in cands.iter().enumerate() {
            nearest[i] = nearest[i].min(dist(c, pick));
        }
    }
    let mut out: Vec<Companion> = Vec::new();
    for fill in chosen {
        let black = [0u8; 3];
        let white = [255u8; 3];
        let outline = if delta_e_seen(fill, black, None) >= delta_e_seen(fill, white, None) {
            black
        } else {
            white
        };
        let mut name = hue_word(fill);
        if out.iter().any(|c| c.name == name) {
            let mut k = 2;
            while out.iter().any(|c| c.name == format!("{name}-{k}")) {
                k += 1;
            }
            name = format!("{name}-{k}");
        }
        out.push(Companion {
            name,
            fill,
            outline,
        });
    }
    out
}

/// The companion set of overlay colours, generated once on first use.
pub fn companions() -> &'static [Companion] {
    static SET: OnceLock<Vec<Companion>> = OnceLock::new();
    SET.get_or_init(choose_companions)
}

/// Smallest pairwise ΔE_OK among the companion fills as seen by `who` (`None` = normal).
pub fn companion_min_delta_e(who: Option<Deficiency>) -> f64 {
    let set = companions();
    let mut m = f64::INFINITY;
    for i in 0..set.len() {
        for j in i + 1..set.len() {
            m = m.min(delta_e_seen(set[i].fill, set[j].fill, who));
        }
    }
    m
}

// ---------------------------------------------------------------------------------------------
// Files.

/// One generated file of the `palettes/` directory.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct GeneratedFile {
    /// File name inside the directory.
    pub name: String,
    /// Full text.
    pub text: String,
}

/// Every file of the `palettes/` directory as the generator produces it now: one
/// `<name>.json` per palette, `companions.json` and `README.md`.
pub fn generated_files() -> Vec<GeneratedFile> {
    let mut files: Vec<GeneratedFile> = builtin()
        .iter()
        .map(|p| GeneratedFile {
            name: format!("{}.json", p.name),
            text: p.to_json(),
        })
        .collect();
    let mut comp = serde_json::to_string_pretty(companions()).unwrap_or_default();
    comp.push('\n');
    files.push(GeneratedFile {
        name: "companions.json".into(),
        text: comp,
    });
    files.push(GeneratedFile {
        name: "README.md".into(),
        text: readme(),
    });
    files
}

fn readme() -> String {
    use std::fmt::Write as _;
    let mut s = String::new();
    let _ = writeln!(s, "# fanmark palettes\n");
    let _ = writeln!(
        s,
        "These files are generated by `fanmark palettes --write palettes/` from the recipes in \
         `core/src/palette.rs`; the library builds the same tables itself and never reads these \
         files. A test checks that the committed files equal what the generator produces. Do \
         not edit them by hand.\n"
    );
    let _ = writeln!(
        s,
        "Each palette file holds `name`, `kind` (sequential or diverging), `purpose`, `recipe` \
         and `colours`: {PALETTE_LEN} 8-bit sRGB colours as `#rrggbb`, for data scaled to \
         t = 0 … 1 (entry i at t = i/255; for a diverging palette zero sits at t = ½).\n"
    );
    let _ = writeln!(s, "| palette | kind | CIE L* first → last | use |");
    let _ = writeln!(s, "|---|---|---|---|");
    for p in builtin() {
        let l = p.lightness_profile();
        let _ = writeln!(
            s,
            "| `{}` | {} | {:.1} → {:.1} | {} |",
            p.name,
            p.kind.name(),
            l[0],
            l[l.len() - 1],
            p.purpose.replace('|', "\\|")
        );
    }
    let _ = writeln!(s);
    for p in builtin() {
        let l = p.lightness_profile();
        let steps: Vec<f64> = l.windows(2).map(|w| (w[1] - w[0]).abs()).collect();
        let min_step = steps.iter().cloned().fold(f64::INFINITY, f64::min);
        let max_step = steps.iter().cloned().fold(0.0, f64::max);
        let _ = writeln!(s, "## `{}` ({})\n", p.name, p.kind.name());
        let _ = writeln!(s, "{}\n", p.purpose);
        let _ = writeln!(s, "Method: {}\n", p.recipe);
        let _ = writeln!(
            s,
            "Ends {} and {}; centre {}. CIE L* steps between neighbours {:.3} … {:.3}.\n",
            to_hex(p.colours[0]),
            to_hex(p.colours[PALETTE_LEN - 1]),
            to_hex(p.sample(0.5)),
            min_step,
            max_step
        );
    }
    let _ = writeln!(s, "## Companion overlay colours (`companions.json`)\n");
    let _ = writeln!(
        s,
        "{COMPANION_COUNT} categorical colours for line families drawn over the heat maps. \
         Chosen by greedy farthest-point selection in Oklab over a grid of 8-bit colours \
         (channels in steps of 15, Oklab L 0.50–0.85, chroma ≥ 0.12), starting from mid blue \
         `#0078ff`, the distance being the \
         least of the normal ΔE_OK (chroma capped at 0.12, so hue sets the spread), the \
         protanopic and the deuteranopic ΔE_OK (colour-vision deficiency \
         simulated with the Machado, Oliveira & Fernandes 2009 matrices at severity 1.0). Each \
         has an outline, black or white, whichever differs more from the fill: draw the line \
         in its outline colour one pixel wider underneath, and it reads on every palette.\n"
    );
    let _ = writeln!(
        s,
        "Smallest pairwise ΔE_OK: normal {:.3} (guaranteed ≥ {COMPANION_MIN_DELTA_E}), \
         protanopia {:.3}, deuteranopia {:.3} (both guaranteed ≥ \
         {COMPANION_MIN_DELTA_E_DICHROMAT}), tritanopia {:.3} (not guaranteed).\n",
        companion_min_delta_e(None),
        companion_min_delta_e(Some(Deficiency::Protanopia)),
        companion_min_delta_e(Some(Deficiency::Deuteranopia)),
        companion_min_delta_e(Some(Deficiency::Tritanopia)),
    );
    let _ = writeln!(s, "| name | fill | outline | Oklab L |");
    let _ = writeln!(s, "|---|---|---|---|");
    for c in companions() {
        let _ = writeln!(
            s,
            "| {} | `{}` | `{}` | {:.3} |",
            c.name,
            to_hex(c.fill),
            to_hex(c.outline),
            srgb8_to_oklab(c.fill)[0]
        );
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn quantisation_stays_close_to_the_designed_path() {
        for d in designs() {
            if matches!(d.path, Path3::Grey) {
                continue;
            }
            let targets = path_targets(&d.path);
            let table = path_colours(&d.path, d.observers);
            for (i, (t, c)) in targets.iter().zip(&table).enumerate() {
                let e = delta_e_ok(linear_srgb_to_oklab(*t), srgb8_to_oklab(*c));
                assert!(e < 0.01, "{} entry {i}: ΔE_OK {e}", d.name);
            }
        }
    }

    #[test]
    fn solved_targets_hit_their_lightness() {
        for d in designs() {
            for i in [0usize, 40, 128, 200, 255] {
                let t = i as f64 / 255.0;
                let (l, a, b) = d.path.target(t);
                let c = solve_target(l, a, b);
                assert!((lightness(c) - l).abs() < 1e-6, "{} at {t}", d.name);
            }
        }
    }

    #[test]
    fn sample_interpolates_between_entries() {
        let mut colours = vec![[0u8; 3]; PALETTE_LEN];
        colours[1] = [100, 50, 255];
        let p = Palette::new("t", PaletteKind::Sequential, "", "", colours).unwrap();
        assert_eq!(p.sample(0.5 / 255.0), [50, 25, 128]);
        assert_eq!(p.sample(1.0 / 255.0), [100, 50, 255]);
        assert_eq!(p.sample(-3.0), [0, 0, 0]);
        assert_eq!(p.sample(f64::NAN), [0, 0, 0]);
    }

    #[test]
    fn new_rejects_wrong_length() {
        assert!(Palette::new("t", PaletteKind::Sequential, "", "", vec![[0; 3]; 10]).is_err());
    }
}

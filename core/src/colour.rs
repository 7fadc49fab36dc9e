//! Colour science for heat maps and overlays: the sRGB transfer curve (IEC 61966-2-1), linear
//! sRGB ↔ CIE XYZ (D65), CIE 1976 L*a*b*, Oklab and its polar form OkLCh, colour differences,
//! gamut mapping into sRGB, and simulation of colour-vision deficiency.
//!
//! Conventions: an *encoded* sRGB value is the display signal in [0, 1] (8-bit value / 255); a
//! *linear* sRGB value is proportional to emitted light, also in [0, 1] when in gamut. XYZ is
//! relative, scaled so that the sRGB white has Y = 1. L* runs 0–100; Oklab L runs 0–1 and its
//! a, b and chroma are in the same units as L. Hue angles are in degrees, in [0, 360).

/// A colour as three linear-light sRGB components (R, G, B), 1 = full drive of a primary.
pub type LinearRgb = [f64; 3];

/// sRGB decoding (IEC 61966-2-1): encoded signal in [0, 1] → linear light.
pub fn srgb_decode(c: f64) -> f64 {
    if c <= 0.040_45 {
        c / 12.92
    } else {
        ((c + 0.055) / 1.055).powf(2.4)
    }
}

/// sRGB encoding (IEC 61966-2-1): linear light → encoded signal. Values outside [0, 1] are
/// encoded by the same curve mirrored (odd extension), so out-of-gamut colours stay visible to
/// callers that check the range.
pub fn srgb_encode(l: f64) -> f64 {
    let a = l.abs();
    let e = if a <= 0.003_130_8 {
        12.92 * a
    } else {
        1.055 * a.powf(1.0 / 2.4) - 0.055
    };
    e.copysign(l)
}

/// An 8-bit sRGB colour → linear sRGB.
pub fn srgb8_to_linear(c: [u8; 3]) -> LinearRgb {
    c.map(|v| srgb_decode(f64::from(v) / 255.0))
}

/// Linear sRGB → the nearest 8-bit sRGB colour, each channel clamped into [0, 1] first.
/// A NaN channel becomes 0.
pub fn linear_to_srgb8(c: LinearRgb) -> [u8; 3] {
    c.map(|v| {
        let e = srgb_encode(if v.is_nan() { 0.0 } else { v.clamp(0.0, 1.0) });
        // `e` is in [0, 1], so the rounded value fits in a u8.
        (e * 255.0).round().clamp(0.0, 255.0) as u8
    })
}

/// Linear sRGB → CIE XYZ (D65), the matrix derived from the sRGB primaries and the D65 white
/// chromaticity (0.3127, 0.3290), so that sRGB white maps exactly onto [`D65_WHITE_XYZ`].
pub const SRGB_TO_XYZ: [[f64; 3]; 3] = [
    [0.412_390_799_3, 0.357_584_339_4, 0.180_480_788_4],
    [0.212_639_005_9, 0.715_168_678_8, 0.072_192_315_4],
    [0.019_330_818_7, 0.119_194_779_8, 0.950_532_152_2],
];

/// CIE XYZ (D65) → linear sRGB: the inverse of [`SRGB_TO_XYZ`].
pub const XYZ_TO_SRGB: [[f64; 3]; 3] = [
    [3.240_969_941_9, -1.537_383_177_6, -0.498_610_760_3],
    [-0.969_243_636_3, 1.875_967_501_5, 0.041_555_057_4],
    [0.055_630_079_7, -0.203_976_958_9, 1.056_971_514_2],
];

/// The D65 white point in XYZ with Y = 1, from its chromaticity (x, y) = (0.3127, 0.3290).
pub const D65_WHITE_XYZ: [f64; 3] = [0.3127 / 0.3290, 1.0, (1.0 - 0.3127 - 0.3290) / 0.3290];

/// Chromaticities (x, y) of the sRGB red, green and blue primaries and of the D65 white
/// (IEC 61966-2-1), from which [`SRGB_TO_XYZ`] is derived.
pub const SRGB_PRIMARIES_XY: [[f64; 2]; 4] =
    [[0.64, 0.33], [0.30, 0.60], [0.15, 0.06], [0.3127, 0.3290]];

fn mul(m: &[[f64; 3]; 3], v: [f64; 3]) -> [f64; 3] {
    [
        m[0][0] * v[0] + m[0][1] * v[1] + m[0][2] * v[2],
        m[1][0] * v[0] + m[1][1] * v[1] + m[1][2] * v[2],
        m[2][0] * v[0] + m[2][1] * v[1] + m[2][2] * v[2],
    ]
}

/// Linear sRGB → CIE XYZ (D65, Y of white = 1).
pub fn linear_srgb_to_xyz(c: LinearRgb) -> [f64; 3] {
    mul(&SRGB_TO_XYZ, c)
}

/// CIE XYZ (D65, Y of white = 1) → linear sRGB (may leave [0, 1] for colours outside sRGB).
pub fn xyz_to_linear_srgb(xyz: [f64; 3]) -> LinearRgb {
    mul(&XYZ_TO_SRGB, xyz)
}

/// Relative luminance Y of a linear sRGB colour (0 black, 1 white).
pub fn relative_luminance(c: LinearRgb) -> f64 {
    SRGB_TO_XYZ[1][0] * c[0] + SRGB_TO_XYZ[1][1] * c[1] + SRGB_TO_XYZ[1][2] * c[2]
}

const LAB_EPS: f64 = (6.0 / 29.0) * (6.0 / 29.0) * (6.0 / 29.0);

fn lab_f(t: f64) -> f64 {
    if t > LAB_EPS {
        t.cbrt()
    } else {
        t / (3.0 * (6.0 / 29.0) * (6.0 / 29.0)) + 4.0 / 29.0
    }
}

fn lab_f_inv(f: f64) -> f64 {
    if f > 6.0 / 29.0 {
        f * f * f
    } else {
        3.0 * (6.0 / 29.0) * (6.0 / 29.0) * (f - 4.0 / 29.0)
    }
}

/// CIE 1976 lightness L* (0–100) of a relative luminance Y (white = 1).
pub fn lightness_from_luminance(y: f64) -> f64 {
    116.0 * lab_f(y) - 16.0
}

/// CIE XYZ → CIE 1976 L*a*b* relative to the D65 white [`D65_WHITE_XYZ`].
pub fn xyz_to_lab(xyz: [f64; 3]) -> [f64; 3] {
    let fx = lab_f(xyz[0] / D65_WHITE_XYZ[0]);
    let fy = lab_f(xyz[1] / D65_WHITE_XYZ[1]);
    let fz = lab_f(xyz[2] / D65_WHITE_XYZ[2]);
    [116.0 * fy - 16.0, 500.0 * (fx - fy), 200.0 * (fy - fz)]
}

/// CIE 1976 L*a*b* (D65) → CIE XYZ.
pub fn lab_to_xyz(lab: [f64; 3]) -> [f64; 3] {
    let fy = (lab[0] + 16.0) / 116.0;
    let fx = fy + lab[1] / 500.0;
    let fz = fy - lab[2] / 200.0;
    [
        D65_WHITE_XYZ[0] * lab_f_inv(fx),
        D65_WHITE_XYZ[1] * lab_f_inv(fy),
        D65_WHITE_XYZ[2] * lab_f_inv(fz),
    ]
}

/// Linear sRGB → CIE 1976 L*a*b* (D65).
pub fn linear_srgb_to_lab(c: LinearRgb) -> [f64; 3] {
    xyz_to_lab(linear_srgb_to_xyz(c))
}

/// CIE L* (0–100) of a linear sRGB colour.
pub fn lightness(c: LinearRgb) -> f64 {
    lightness_from_luminance(relative_luminance(c))
}

/// CIE L* (0–100) of an 8-bit sRGB colour.
pub fn lightness8(c: [u8; 3]) -> f64 {
    lightness(srgb8_to_linear(c))
}

/// CIE 1976 colour difference ΔE*ab: Euclidean distance in L*a*b*.
pub fn delta_e_76(a: [f64; 3], b: [f64; 3]) -> f64 {
    dist(a, b)
}

fn dist(a: [f64; 3], b: [f64; 3]) -> f64 {
    ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
}

// Oklab (Ottosson 2020): linear sRGB → cone-like LMS, cube root, then the opponent matrix.
// The matrices were typed from memory (M); the test suite checks them against independently
// computed Oklab values of white, grey and the primaries and against the published XYZ examples.
const SRGB_TO_LMS: [[f64; 3]; 3] = [
    [0.412_221_470_8, 0.536_332_536_3, 0.051_445_992_9],
    [0.211_903_498_2, 0.680_699_545_1, 0.107_396_956_6],
    [0.088_302_461_9, 0.281_718_837_6, 0.629_978_700_5],
];
const LMS_TO_SRGB: [[f64; 3]; 3] = [
    [4.076_741_662_1, -3.307_711_591_3, 0.230_969_929_2],
    [-1.268_438_004_6, 2.609_757_401_1, -0.341_319_396_5],
    [-0.004_196_086_3, -0.703_418_614_7, 1.707_614_701_0],
];
const XYZ_TO_LMS: [[f64; 3]; 3] = [
    [0.818_933_010_1, 0.361_866_742_4, -0.128_859_713_7],
    [0.032_984_543_6, 0.929_311_871_5, 0.036_145_638_7],
    [0.048_200_301_8, 0.264_366_269_1, 0.633_851_707_0],
];
const LMS_TO_OKLAB: [[f64; 3]; 3] = [
    [0.210_454_255_3, 0.793_617_785_0, -0.004_072_046_8],
    [1.977_998_495_1, -2.428_592_205_0, 0.450_593_709_9],
    [0.025_904_037_1, 0.782_771_766_2, -0.808_675_766_0],
];
const OKLAB_TO_LMS: [[f64; 3]; 3] = [
    [1.0, 0.396_337_777_4, 0.215_803_757_3],
    [1.0, -0.105_561_345_8, -0.063_854_172_8],
    [1.0, -0.089_484_177_5, -1.291_485_548_0],
];

/// Linear sRGB → Oklab (L, a, b).
pub fn linear_srgb_to_oklab(c: LinearRgb) -> [f64; 3] {
    let lms = mul(&SRGB_TO_LMS, c).map(f64::cbrt);
    mul(&LMS_TO_OKLAB, lms)
}

/// Oklab (L, a, b) → linear sRGB (may leave [0, 1] for colours outside sRGB).
pub fn oklab_to_linear_srgb(lab: [f64; 3]) -> LinearRgb {
    let lms = mul(&OKLAB_TO_LMS, lab).map(|v| v * v * v);
    mul(&LMS_TO_SRGB, lms)
}

/// CIE XYZ (D65, Y of white = 1) → Oklab, through Oklab's own XYZ → LMS matrix.
pub fn xyz_to_oklab(xyz: [f64; 3]) -> [f64; 3] {
    let lms = mul(&XYZ_TO_LMS, xyz).map(f64::cbrt);
    mul(&LMS_TO_OKLAB, lms)
}

/// 8-bit sRGB → Oklab.
pub fn srgb8_to_oklab(c: [u8; 3]) -> [f64; 3] {
    linear_srgb_to_oklab(srgb8_to_linear(c))
}

/// Oklab (L, a, b) → OkLCh (L, chroma C, hue h in degrees in [0, 360)).
pub fn oklab_to_oklch(lab: [f64; 3]) -> [f64; 3] {
    let c = lab[1].hypot(lab[2]);
    let h = lab[2].atan2(lab[1]).to_degrees().rem_euclid(360.0);
    [lab[0], c, h]
}

/// OkLCh (L, chroma C, hue h in degrees) → Oklab (L, a, b).
pub fn oklch_to_oklab(lch: [f64; 3]) -> [f64; 3] {
    let (s, c) = lch[2].to_radians().sin_cos();
    [lch[0], lch[1] * c, lch[1] * s]
}

/// Colour difference ΔE_OK: Euclidean distance in Oklab, in Oklab units (0.01 ≈ just
/// noticeable side by side; white–black is 1).
pub fn delta_e_ok(a: [f64; 3], b: [f64; 3]) -> f64 {
    dist(a, b)
}

/// Whether a linear sRGB colour lies inside the sRGB gamut, allowing `tolerance` per channel.
pub fn in_gamut(c: LinearRgb, tolerance: f64) -> bool {
    c.iter().all(|&v| v >= -tolerance && v <= 1.0 + tolerance)
}

/// The displayable colour for an OkLCh request (L in [0, 1], chroma C ≥ 0, hue h in degrees):
/// if it lies outside sRGB, chroma is reduced at fixed lightness and hue (bisection to 10⁻⁷)
/// until it fits. Returns linear sRGB clamped into [0, 1]. L ≤ 0 gives black, L ≥ 1 white.
pub fn gamut_map_oklch(l: f64, c: f64, h: f64) -> LinearRgb {
    if l.is_nan() || l <= 0.0 {
        return [0.0; 3];
    }
    if l >= 1.0 {
        return [1.0; 3];
    }
    let c = if c.is_finite() { c.max(0.0) } else { 0.0 };
    let at = |chroma: f64| oklab_to_linear_srgb(oklch_to_oklab([l, chroma, h]));
    let first = at(c);
    let colour = if in_gamut(first, 1e-9) {
        first
    } else {
        let (mut lo, mut hi) = (0.0, c);
        while hi - lo > 1e-7 {
            let mid = 0.5 * (lo + hi);
            if in_gamut(at(mid), 1e-9) {
                lo = mid;
            } else {
                hi = mid;
            }
        }
        at(lo)
    };
    colour.map(|v| v.clamp(0.0, 1.0))
}

/// The three dichromacies (complete loss of one cone type).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash, serde::Serialize, serde::Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum Deficiency {
    /// No long-wavelength (red) cones.
    Protanopia,
    /// No medium-wavelength (green) cones.
    Deuteranopia,
    /// No short-wavelength (blue) cones.
    Tritanopia,
}

impl Deficiency {
    /// All three, in a fixed order.
    pub const ALL: [Deficiency; 3] = [
        Deficiency::Protanopia,
        Deficiency::Deuteranopia,
        Deficiency::Tritanopia,
    ];

    /// Lower-case name used in reports and files.
    pub fn name(self) -> &'static str {
        match self {
            Deficiency::Protanopia => "protanopia",
            Deficiency::Deuteranopia => "deuteranopia",
            Deficiency::Tritanopia => "tritanopia",
        }
    }

    /// The simulation matrix of Machado, Oliveira & Fernandes (2009) at severity 1.0, acting on
    /// linear sRGB. The values were typed from memory (M) and agree digit for digit with the
    /// published tabulation of the method.
    pub fn matrix(self) -> [[f64; 3]; 3] {
        match self {
            Deficiency::Protanopia => [
                [0.152_286, 1.052_583, -0.204_868],
                [0.114_503, 0.786_281, 0.099_216],
                [-0.003_882, -0.048_116, 1.051_998],
            ],
            Deficiency::Deuteranopia => [
                [0.367_322, 0.860_646, -0.227_968],
                [0.280_085, 0.672_501, 0.047_413],
                [-0.011_820, 0.042_940, 0.968_881],
            ],
            Deficiency::Tritanopia => [
                [1.255_528, -0.076_749, -0.178_779],
                [-0.078_411, 0.930_809, 0.147_602],
                [0.004_733, 0.691_367, 0.303_900],
            ],
        }
    }
}

/// How a colour-vision-deficient observer sees a linear sRGB colour (Machado, Oliveira &
/// Fernandes 2009, severity 1.0, applied in linear sRGB), clamped into the displayable [0, 1].
pub fn simulate_deficiency(c: LinearRgb, d: Deficiency) -> LinearRgb {
    mul(&d.matrix(), c).map(|v| v.clamp(0.0, 1.0))
}

/// An 8-bit colour as `#rrggbb` (lower-case hex).
pub fn to_hex(c: [u8; 3]) -> String {
    format!("#{:02x}{:02x}{:02x}", c[0], c[1], c[2])
}

/// Parse `#rrggbb` (or `rrggbb`, either case) into an 8-bit colour; `None` if malformed.
pub fn parse_hex(text: &str) -> Option<[u8; 3]> {
    let h = text.strip_prefix('#').unwrap_or(text);
    if h.len() != 6 || !h.bytes().all(|b| b.is_ascii_hexdigit()) {
        return None;
    }
    let byte = |i: usize| u8::from_str_radix(&h[i..i + 2], 16).ok();
    Some([byte(0)?, byte(2)?, byte(4)?])
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn transfer_curve_round_trips_and_is_continuous() {
        for i in 0..=1000 {
            let c = f64::from(i) / 1000.0;
            assert!((srgb_encode(srgb_decode(c)) - c).abs() < 1e-12, "c = {c}");
        }
        // The two pieces meet at the breakpoint (IEC 61966-2-1): within 1e-7 on each side.
        let lo = 0.040_45 / 12.92;
        assert!((((0.040_45 + 0.055) / 1.055f64).powf(2.4) - lo).abs() < 1e-7);
    }

    #[test]
    fn every_8bit_value_round_trips() {
        for v in 0..=255u8 {
            let c = [v, 255 - v, v / 2];
            assert_eq!(linear_to_srgb8(srgb8_to_linear(c)), c);
        }
    }

    #[test]
    fn xyz_matrices_are_inverse() {
        for c in [
            [1.0, 0.0, 0.0],
            [0.0, 1.0, 0.0],
            [0.0, 0.0, 1.0],
            [0.2, 0.5, 0.9],
        ] {
            let back = xyz_to_linear_srgb(linear_srgb_to_xyz(c));
            for k in 0..3 {
                assert!((back[k] - c[k]).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn lab_round_trips() {
        for c in [[0.9, 0.1, 0.3], [0.001, 0.002, 0.0005], [0.5, 0.5, 0.5]] {
            let xyz = linear_srgb_to_xyz(c);
            let back = lab_to_xyz(xyz_to_lab(xyz));
            for k in 0..3 {
                assert!((back[k] - xyz[k]).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn oklab_and_oklch_round_trip() {
        for c in [[0.9, 0.1, 0.3], [0.01, 0.2, 0.05], [0.5, 0.5, 0.5]] {
            let lab = linear_srgb_to_oklab(c);
            let back = oklab_to_linear_srgb(oklch_to_oklab(oklab_to_oklch(lab)));
            for k in 0..3 {
                assert!((back[k] - c[k]).abs() < 1e-6, "{c:?} → {back:?}");
            }
        }
    }

    #[test]
    fn gamut_mapping_keeps_lightness_and_hue() {
        let (l, h) = (0.7, 150.0);
        let c = gamut_map_oklch(l, 0.4, h);
        assert!(in_gamut(c, 0.0));
        let lch = oklab_to_oklch(linear_srgb_to_oklab(c));
        assert!((lch[0] - l).abs() < 1e-5);
        assert!((lch[2] - h).abs() < 1e-3);
        assert!(lch[1] < 0.4 && lch[1] > 0.1);
        // An in-gamut request is returned unchanged.
        let g = gamut_map_oklch(0.6, 0.02, 40.0);
        let lch = oklab_to_oklch(linear_srgb_to_oklab(g));
        assert!((lch[1] - 0.02).abs() < 1e-6);
    }

    #[test]
    fn hex_parses_and_rejects() {
        assert_eq!(parse_hex("#1a2B3c"), Some([0x1a, 0x2b, 0x3c]));
        assert_eq!(to_hex([0x1a, 0x2b, 0x3c]), "#1a2b3c");
        assert_eq!(parse_hex("#12345"), None);
        assert_eq!(parse_hex("#12345g"), None);
        assert_eq!(parse_hex("#ééé"), None);
    }

    #[test]
    fn deficiency_matrices_keep_white() {
        // Each row of a severity-1.0 matrix sums to 1, so white and greys are unchanged.
        for d in Deficiency::ALL {
            let w = simulate_deficiency([0.4, 0.4, 0.4], d);
            for v in w {
                assert!((v - 0.4).abs() < 1e-5, "{d:?}");
            }
        }
    }
}

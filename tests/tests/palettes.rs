//! Colour science reference checks and the perceptual guarantees of the built-in palettes and
//! the companion overlay colours.

use fanmark_core::colour::{
    delta_e_ok, lightness, lightness8, linear_srgb_to_lab, linear_srgb_to_oklab, oklab_to_oklch,
    simulate_deficiency, srgb8_to_linear, srgb8_to_oklab, xyz_to_oklab, Deficiency, D65_WHITE_XYZ,
    SRGB_PRIMARIES_XY, SRGB_TO_XYZ,
};
use fanmark_core::palette::{
    self, by_name, companion_min_delta_e, companions, delta_e_seen, Palette, PaletteKind,
    COMPANION_MIN_DELTA_E, COMPANION_MIN_DELTA_E_DICHROMAT, COMPANION_MIN_OUTLINE_DELTA_E,
    PALETTE_LEN,
};
use std::path::{Path, PathBuf};

fn lab8(c: [u8; 3]) -> [f64; 3] {
    linear_srgb_to_lab(srgb8_to_linear(c))
}

fn close(what: &str, got: f64, want: f64, tol: f64) {
    assert!(
        (got - want).abs() <= tol,
        "{what}: got {got}, expected {want} ± {tol}"
    );
}

/// L* of a colour as seen by an observer (`None` = normal vision).
fn seen_l(c: [u8; 3], who: Option<Deficiency>) -> f64 {
    let lin = srgb8_to_linear(c);
    lightness(match who {
        None => lin,
        Some(d) => simulate_deficiency(lin, d),
    })
}

// ---- §13 reference values ------------------------------------------------------------------

#[test]
fn cie_lab_of_white_grey_and_primaries() {
    // check-values §13, sRGB (IEC 61966-2-1:1999) → CIE 1976 L*a*b* (D65, CIE 15), computed
    // with colour-science 0.4.7 and independent code (status V). fanmark uses the matrix derived
    // from the primaries and D65 xy, so the "primaries-derived" column applies where given.
    // Tolerances as suggested there: L* ± 0.01, a*, b* ± 0.05.
    let white = lab8([255, 255, 255]);
    close("L* white", white[0], 100.0, 0.01);
    close("a* white", white[1], 0.0, 0.05);
    close("b* white", white[2], 0.0, 0.05);
    let g119 = lab8([119, 119, 119]);
    close("L* grey 119", g119[0], 50.0344, 0.01);
    close("a* grey 119", g119[1], 0.0, 0.05);
    close("b* grey 119", g119[2], 0.0, 0.05);
    close("L* grey 128", lab8([128, 128, 128])[0], 53.585, 0.01);
    let cases: [([u8; 3], [f64; 3]); 3] = [
        ([255, 0, 0], [53.2371, 80.090, 67.203]),
        ([0, 255, 0], [87.7355, -86.182, 83.187]),
        ([0, 0, 255], [32.3009, 79.195, -107.856]),
    ];
    for (c, want) in cases {
        let got = lab8(c);
        close(&format!("L* {c:?}"), got[0], want[0], 0.01);
        close(&format!("a* {c:?}"), got[1], want[1], 0.05);
        close(&format!("b* {c:?}"), got[2], want[2], 0.05);
    }
}

#[test]
fn cie_lab_of_secondaries() {
    // check-values §13 (status V): yellow, cyan, magenta, given for the IEC 4-digit matrix; the
    // matrix choice moves L* by ≤ 0.004 and a*b* by ≈ 0.02 (§14 pitfall 8), inside the
    // suggested tolerances L* ± 0.01, a*, b* ± 0.05.
    let cases: [([u8; 3], [f64; 3]); 3] = [
        ([255, 255, 0], [97.138, -21.554, 94.490]),
        ([0, 255, 255], [91.115, -48.078, -14.124]),
        ([255, 0, 255], [60.320, 98.256, -60.830]),
    ];
    for (c, want) in cases {
        let got = lab8(c);
        close(&format!("L* {c:?}"), got[0], want[0], 0.01);
        close(&format!("a* {c:?}"), got[1], want[1], 0.05);
        close(&format!("b* {c:?}"), got[2], want[2], 0.05);
    }
}

#[test]
fn oklab_of_white_grey_and_primaries() {
    // check-values §13, Oklab via the linear-sRGB matrix (status V, reproduces colour-science
    // to ≤ 5e-5); tolerance 2e-4 as suggested there.
    let cases: [([u8; 3], [f64; 3]); 5] = [
        ([255, 255, 255], [1.0, 0.0, 0.0]),
        ([119, 119, 119], [0.569_261, 0.0, 0.0]),
        ([255, 0, 0], [0.627_955, 0.224_863, 0.125_846]),
        ([0, 255, 0], [0.866_436, -0.233_919, 0.179_498]),
        ([0, 0, 255], [0.452_014, -0.032_457, -0.311_528]),
    ];
    for (c, want) in cases {
        let got = srgb8_to_oklab(c);
        for k in 0..3 {
            close(&format!("Oklab[{k}] {c:?}"), got[k], want[k], 2e-4);
        }
    }
}

#[test]
fn oklab_from_xyz_matches_the_published_examples() {
    // check-values §13: the XYZ → Oklab example table of the Oklab definition (values from
    // memory, M; recomputed there, V). Given to 3 decimals.
    let cases: [([f64; 3], [f64; 3]); 4] = [
        ([0.950, 1.000, 1.089], [1.000, 0.000, 0.000]),
        ([1.0, 0.0, 0.0], [0.450, 1.236, -0.019]),
        ([0.0, 1.0, 0.0], [0.922, -0.671, 0.263]),
        ([0.0, 0.0, 1.0], [0.153, -1.415, -0.449]),
    ];
    for (xyz, want) in cases {
        let got = xyz_to_oklab(xyz);
        for k in 0..3 {
            close(
                &format!("Oklab[{k}] of XYZ {xyz:?}"),
                got[k],
                want[k],
                1.5e-3,
            );
        }
    }
}

#[test]
fn srgb_matrix_follows_from_the_primaries_and_d65() {
    // IEC 61966-2-1: primaries (0.64, 0.33), (0.30, 0.60), (0.15, 0.06), white D65
    // (0.3127, 0.3290). Derive the RGB → XYZ matrix by the standard construction (columns are
    // the primaries' XYZ scaled so that they sum to the white) and compare.
    let xyz_of = |xy: [f64; 2]| [xy[0] / xy[1], 1.0, (1.0 - xy[0] - xy[1]) / xy[1]];
    let p: Vec<[f64; 3]> = SRGB_PRIMARIES_XY[..3]
        .iter()
        .map(|&xy| xyz_of(xy))
        .collect();
    let w = xyz_of(SRGB_PRIMARIES_XY[3]);
    for k in 0..3 {
        close("D65 white", D65_WHITE_XYZ[k], w[k], 1e-12);
    }
    // Solve P·s = w by Cramer's rule, P's columns being the primaries.
    let m = |r: usize, c: usize| p[c][r];
    let det3 = |a: [[f64; 3]; 3]| {
        a[0][0] * (a[1][1] * a[2][2] - a[1][2] * a[2][1])
            - a[0][1] * (a[1][0] * a[2][2] - a[1][2] * a[2][0])
            + a[0][2] * (a[1][0] * a[2][1] - a[1][1] * a[2][0])
    };
    let full = [
        [m(0, 0), m(0, 1), m(0, 2)],
        [m(1, 0), m(1, 1), m(1, 2)],
        [m(2, 0), m(2, 1), m(2, 2)],
    ];
    let d = det3(full);
    for c in 0..3 {
        let mut a = full;
        for r in 0..3 {
            a[r][c] = w[r];
        }
        let s = det3(a) / d;
        for r in 0..3 {
            close(
                &format!("SRGB_TO_XYZ[{r}][{c}]"),
                SRGB_TO_XYZ[r][c],
                s * p[c][r],
                2e-10,
            );
        }
    }
    // The luminance row rounds to the IEC 4-digit values 0.2126, 0.7152, 0.0722 (check-values §13).
    close("Y_R", SRGB_TO_XYZ[1][0], 0.2126, 5e-5);
    close("Y_G", SRGB_TO_XYZ[1][1], 0.7152, 5e-5);
    close("Y_B", SRGB_TO_XYZ[1][2], 0.0722, 5e-5);
}

#[test]
fn dichromat_simulation_collapses_onto_the_blue_yellow_axis() {
    // The Machado, Oliveira & Fernandes (2009) severity-1.0 matrices (values from memory, M)
    // model protanopes and deuteranopes,
    // whose remaining colour sense is one blue–yellow axis: every simulated colour with some
    // chroma has an Oklab hue near yellow (≈ 90–110°) or near blue (≈ 250–280°).
    for d in [Deficiency::Protanopia, Deficiency::Deuteranopia] {
        for r in (0..=255u16).step_by(17) {
            for g in (0..=255u16).step_by(17) {
                for b in (0..=255u16).step_by(17) {
                    let c = [r as u8, g as u8, b as u8];
                    let s = simulate_deficiency(srgb8_to_linear(c), d);
                    let lch = oklab_to_oklch(linear_srgb_to_oklab(s));
                    if lch[1] > 0.03 {
                        let h = lch[2];
                        assert!(
                            (80.0..=120.0).contains(&h) || (240.0..=290.0).contains(&h),
                            "{d:?}: {c:?} seen at hue {h}"
                        );
                    }
                }
            }
        }
    }
    // A red and a green told apart in normal vision (ΔE_OK ≈ 0.34) end up much closer.
    let (red, green) = ([220u8, 50, 30], [40u8, 170, 60]);
    assert!(delta_e_seen(red, green, None) > 0.3);
    for d in [Deficiency::Protanopia, Deficiency::Deuteranopia] {
        assert!(
            delta_e_seen(red, green, Some(d)) < 0.7 * delta_e_seen(red, green, None),
            "{d:?}"
        );
    }
}

// ---- palettes ------------------------------------------------------------------------------

#[test]
fn the_required_palettes_exist() {
    let all = palette::builtin();
    let seq = all
        .iter()
        .filter(|p| p.kind() == PaletteKind::Sequential)
        .count();
    let div = all
        .iter()
        .filter(|p| p.kind() == PaletteKind::Diverging)
        .count();
    assert!(seq >= 3 && div >= 2, "{seq} sequential, {div} diverging");
    for p in all {
        assert_eq!(p.colours().len(), PALETTE_LEN, "{}", p.name());
        assert!(!p.recipe().is_empty() && !p.purpose().is_empty());
    }
    // The grey ramp is neutral.
    let ash = by_name(palette::ASH).unwrap();
    assert!(ash.colours().iter().all(|c| c[0] == c[1] && c[1] == c[2]));
    assert!(by_name("no-such").is_err());
}

#[test]
fn sequential_lightness_is_strictly_monotone_for_every_observer() {
    // Lightness order must survive colour-vision deficiency: normal, protanopia, deuteranopia
    // for every sequential palette; the blue–yellow palette also for tritanopia.
    for p in palette::builtin()
        .iter()
        .filter(|p| p.kind() == PaletteKind::Sequential)
    {
        let mut observers = vec![
            None,
            Some(Deficiency::Protanopia),
            Some(Deficiency::Deuteranopia),
        ];
        if p.name() == palette::HARBOUR {
            observers.push(Some(Deficiency::Tritanopia));
        }
        for who in observers {
            let l: Vec<f64> = p.colours().iter().map(|&c| seen_l(c, who)).collect();
            for i in 1..l.len() {
                assert!(
                    l[i] > l[i - 1],
                    "{} ({who:?}): L* {} at {} then {} at {i}",
                    p.name(),
                    l[i - 1],
                    i - 1,
                    l[i]
                );
            }
            // Dark to light over most of the range.
            assert!(l[l.len() - 1] - l[0] > 70.0, "{} ({who:?})", p.name());
        }
    }
}

#[test]
fn resistance_palette_changes_hue_enough_to_read_levels() {
    let p = by_name(palette::KILN).unwrap();
    let lch: Vec<[f64; 3]> = p
        .colours()
        .iter()
        .map(|&c| oklab_to_oklch(srgb8_to_oklab(c)))
        .collect();
    // Unwrapped hue travel along the entries with enough chroma to have a hue.
    let mut travel = 0.0;
    let mut last: Option<f64> = None;
    for c in lch.iter().filter(|c| c[1] > 0.03) {
        if let Some(h0) = last {
            let d = (c[2] - h0 + 540.0).rem_euclid(360.0) - 180.0;
            travel += d.abs();
        }
        last = Some(c[2]);
    }
    assert!(travel > 120.0, "hue travel {travel}°");
}

#[test]
fn diverging_lightness_is_symmetric_and_monotone_on_each_half() {
    // Tolerance: L* of entries i and 255 − i agree within 0.5 (8-bit rounding).
    const SYMMETRY_TOL: f64 = 0.5;
    for p in palette::builtin()
        .iter()
        .filter(|p| p.kind() == PaletteKind::Diverging)
    {
        for who in [
            None,
            Some(Deficiency::Protanopia),
            Some(Deficiency::Deuteranopia),
        ] {
            let l: Vec<f64> = p.colours().iter().map(|&c| seen_l(c, who)).collect();
            let n = l.len();
            if who.is_none() {
                for i in 0..n / 2 {
                    assert!(
                        (l[i] - l[n - 1 - i]).abs() <= SYMMETRY_TOL,
                        "{}: L* {} at {i} vs {} at {}",
                        p.name(),
                        l[i],
                        l[n - 1 - i],
                        n - 1 - i
                    );
                }
            }
            // Light centre: L* rises towards the middle; dark centre: it falls.
            let sign = if l[n / 2] > l[0] { 1.0 } else { -1.0 };
            for i in 1..n / 2 {
                assert!(
                    sign * (l[i] - l[i - 1]) > 0.0,
                    "{} ({who:?}) lower half at {i}",
                    p.name()
                );
            }
            for i in n / 2..n - 1 {
                assert!(
                    sign * (l[i] - l[i + 1]) > 0.0,
                    "{} ({who:?}) upper half at {i}",
                    p.name()
                );
            }
            assert!((l[n / 2] - l[0]).abs() > 50.0, "{}: L* range", p.name());
        }
        // Neutral centre, two clearly different hues on the arms.
        let mid = oklab_to_oklch(srgb8_to_oklab(p.sample(0.5)));
        assert!(mid[1] < 0.01, "{}: centre chroma {}", p.name(), mid[1]);
        let lo = oklab_to_oklch(srgb8_to_oklab(p.sample(0.15)));
        let hi = oklab_to_oklch(srgb8_to_oklab(p.sample(0.85)));
        let dh = (lo[2] - hi[2] + 540.0).rem_euclid(360.0) - 180.0;
        assert!(
            dh.abs() > 90.0,
            "{}: arm hues {} and {}",
            p.name(),
            lo[2],
            hi[2]
        );
        assert!(lo[1] > 0.05 && hi[1] > 0.05);
    }
}

#[test]
fn sampling_and_reversal() {
    for p in palette::builtin() {
        let c = p.colours();
        assert_eq!(p.sample(0.0), c[0]);
        assert_eq!(p.sample(1.0), c[PALETTE_LEN - 1]);
        assert_eq!(p.sample(2.0), c[PALETTE_LEN - 1]);
        assert_eq!(p.sample(100.0 / 255.0), c[100]);
        // Between two entries the sample lies channel-wise between them.
        let s = p.sample(100.5 / 255.0);
        for k in 0..3 {
            let (a, b) = (c[100][k].min(c[101][k]), c[100][k].max(c[101][k]));
            assert!((a..=b).contains(&s[k]), "{}", p.name());
        }
        let r = p.reversed();
        for i in 0..PALETTE_LEN {
            assert_eq!(r.colours()[i], c[PALETTE_LEN - 1 - i]);
        }
        assert_eq!(r.reversed().colours(), c);
        let by = by_name(&format!("{}-reversed", p.name())).unwrap();
        assert_eq!(by.colours(), r.colours());
    }
    // Sampled lightness along a sequential palette never falls by more than 0.2 L* (channel
    // interpolation between two rising entries can dip slightly; a table step is ≈ 0.35).
    for p in palette::builtin()
        .iter()
        .filter(|p| p.kind() == PaletteKind::Sequential)
    {
        let mut prev = -1.0;
        for i in 0..=2000 {
            let l = lightness8(p.sample(f64::from(i) / 2000.0));
            assert!(l >= prev - 0.2, "{} at {i}: {prev} then {l}", p.name());
            prev = l;
        }
    }
}

// ---- files ---------------------------------------------------------------------------------

fn palettes_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("../palettes")
}

#[test]
fn committed_files_equal_the_generator() {
    let dir = palettes_dir();
    let files = palette::generated_files();
    assert!(files.iter().any(|f| f.name == "README.md"));
    for f in &files {
        let path = dir.join(&f.name);
        let on_disk = std::fs::read_to_string(&path).unwrap_or_else(|e| {
            panic!(
                "{}: {e}; run `fanmark palettes --write palettes/`",
                path.display()
            )
        });
        assert!(
            on_disk == f.text,
            "{} differs from the generator; run `fanmark palettes --write palettes/`",
            path.display()
        );
    }
    // Every committed palette file reads back into the built-in palette.
    for p in palette::builtin() {
        let path = dir.join(format!("{}.json", p.name()));
        assert_eq!(&Palette::read(&path).unwrap(), p);
    }
}

#[test]
fn malformed_palette_files_get_clear_errors() {
    let p = by_name(palette::SEESAW).unwrap();
    let good = p.to_json();
    let path = Path::new("bad/seesaw.json");
    let bad_hex = good.replacen(&fanmark_core::colour::to_hex(p.colours()[3]), "#12zz56", 1);
    let e = Palette::from_json(&bad_hex, path).unwrap_err().to_string();
    assert!(e.contains("bad/seesaw.json"), "{e}");
    assert!(e.contains("#12zz56") && e.contains("#rrggbb"), "{e}");
    assert!(e.contains("line"), "{e}");

    let mut v: serde_json::Value = serde_json::from_str(&good).unwrap();
    v["colours"].as_array_mut().unwrap().truncate(10);
    let e = Palette::from_json(&v.to_string(), path)
        .unwrap_err()
        .to_string();
    assert!(e.contains("expected 256 colours, found 10"), "{e}");

    let mut v: serde_json::Value = serde_json::from_str(&good).unwrap();
    v["kind"] = serde_json::Value::String("circular".into());
    let e = Palette::from_json(&v.to_string(), path)
        .unwrap_err()
        .to_string();
    assert!(e.contains("circular"), "{e}");
}

// ---- companion overlay colours -------------------------------------------------------------

#[test]
fn companions_are_mutually_distinct_for_every_observer() {
    let set = companions();
    assert!((8..=10).contains(&set.len()), "{} colours", set.len());
    for (who, bound) in [
        (None, COMPANION_MIN_DELTA_E),
        (
            Some(Deficiency::Protanopia),
            COMPANION_MIN_DELTA_E_DICHROMAT,
        ),
        (
            Some(Deficiency::Deuteranopia),
            COMPANION_MIN_DELTA_E_DICHROMAT,
        ),
    ] {
        for i in 0..set.len() {
            for j in i + 1..set.len() {
                let d = delta_e_seen(set[i].fill, set[j].fill, who);
                assert!(
                    d >= bound,
                    "{who:?}: {} and {} only {d} apart (bound {bound})",
                    set[i].name,
                    set[j].name
                );
            }
        }
        assert!(companion_min_delta_e(who) >= bound);
    }
    let mut names: Vec<&str> = set.iter().map(|c| c.name.as_str()).collect();
    names.sort_unstable();
    names.dedup();
    assert_eq!(names.len(), set.len(), "names are unique");
}

#[test]
fn every_companion_reads_on_every_palette() {
    // A line drawn in its fill over an outline one pixel wider: on any background, fill or
    // outline must stand out by at least READ_DE. Since fill and outline are ≥ 0.45 apart,
    // the triangle inequality guarantees ≥ 0.225 everywhere; check it on every table entry,
    // also as seen with deuteranopia and protanopia.
    const READ_DE: f64 = 0.2;
    for c in companions() {
        assert!(
            delta_e_seen(c.fill, c.outline, None) >= COMPANION_MIN_OUTLINE_DELTA_E,
            "{}",
            c.name
        );
        for p in palette::builtin() {
            for who in [
                None,
                Some(Deficiency::Protanopia),
                Some(Deficiency::Deuteranopia),
            ] {
                for &bg in p.colours() {
                    let best = delta_e_seen(c.fill, bg, who).max(delta_e_seen(c.outline, bg, who));
                    assert!(
                        best >= READ_DE,
                        "{} on {} ({who:?}) at {bg:?}: {best}",
                        c.name,
                        p.name()
                    );
                }
            }
        }
    }
}

#[test]
fn companion_file_round_trips() {
    let text = std::fs::read_to_string(palettes_dir().join("companions.json")).unwrap();
    let back: Vec<palette::Companion> = serde_json::from_str(&text).unwrap();
    assert_eq!(back.as_slice(), companions());
    // Fills are not neutral: each has an Oklab chroma of at least 0.1.
    for c in companions() {
        let lab = srgb8_to_oklab(c.fill);
        assert!(lab[1].hypot(lab[2]) >= 0.1, "{}", c.name);
        assert!(delta_e_ok(lab, srgb8_to_oklab([128, 128, 128])) > 0.1);
    }
}

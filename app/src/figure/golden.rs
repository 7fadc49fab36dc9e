//! End-to-end checks of the three backends on fixed scenes: a committed reference PNG, the SVG
//! parsed as XML, the PDF rasterised with pdftoppm (when installed) and compared with the PNG.
//! Set `FANMARK_BLESS=1` to rewrite the reference images; set `FANMARK_DEMO_DIR` and run the
//! ignored `demo_figures` test to write demo figures for inspection.

use super::draw::Item;
use super::layout::layout;
use super::scene::*;
use super::{pdf, raster, svg};
use fanmark_core::constants::E_OVER_H;
use ndarray::Array2;
use std::path::{Path, PathBuf};
use std::sync::Arc;

fn grey() -> Vec<[u8; 3]> {
    (0..256).map(|i| [i as u8; 3]).collect()
}

/// Two-colour table: dark blue to light orange, linear in sRGB.
fn two_colour() -> Vec<[u8; 3]> {
    let (a, b) = ([20.0, 30.0, 90.0], [250.0, 200.0, 120.0]);
    (0..256)
        .map(|i| {
            let t = i as f64 / 255.0;
            [0, 1, 2].map(|k| (a[k] + (b[k] - a[k]) * t).round() as u8)
        })
        .collect()
}

/// Filling factor ν = n h / (e B) with n in 10¹² cm⁻² (10¹⁶ m⁻²) and B in T.
fn filling(n12: f64, b: f64) -> f64 {
    n12 * 1e16 / (E_OVER_H * b)
}

/// Density in 10¹² cm⁻² of filling factor ν at field B (T): n = ν e B / h.
fn density12(nu: f64, b: f64) -> f64 {
    nu * E_OVER_H * b / 1e16
}

/// An invented monolayer-like device: R_xx minima at ν = ±2, ±6, ±10, … (kΩ).
fn fan(nx: usize, ny: usize, n_range: (f64, f64), b_range: (f64, f64)) -> HeatMap {
    let x: Vec<f64> = (0..nx)
        .map(|j| n_range.0 + (n_range.1 - n_range.0) * j as f64 / (nx - 1) as f64)
        .collect();
    let y: Vec<f64> = (0..ny)
        .map(|i| b_range.0 + (b_range.1 - b_range.0) * i as f64 / (ny - 1) as f64)
        .collect();
    let values = Array2::from_shape_fn((ny, nx), |(i, j)| {
        let (n, b) = (x[j], y[i].max(0.05));
        let nu = filling(n, b);
        let osc = 0.5 * (1.0 - (std::f64::consts::TAU * (nu.abs() - 2.0) / 4.0).cos());
        let damp = (-(nu.abs() / 40.0)).exp();
        0.3 + 4.0 / (1.0 + (n / 0.15).powi(2)) + 2.5 * osc * damp
    });
    HeatMap {
        values,
        x,
        y,
        colors: grey(),
        scale: ColorScale::Linear,
        range: ValueRange::Percentile(1.0, 99.0),
        resample: Resample::Bilinear,
        missing: None,
    }
}

fn nu_line(nu: f64, b_max: f64, style: LineStyle) -> Polyline {
    Polyline {
        points: (0..=20)
            .map(|k| {
                let b = b_max * k as f64 / 20.0;
                (density12(nu, b), b)
            })
            .collect(),
        style,
    }
}

/// The small fixed scene of the golden tests.
fn small_scene() -> Figure {
    let mut fig = Figure::new(70.0, 50.0);
    fig.dpi = 150.0;
    fig.title = "Device A1, R_{xx}".into();
    let mut p = Panel::new(
        AxisSpec {
            label: "n (10^{12} cm^{−2})".into(),
            range: (-2.0, 2.0),
        },
        AxisSpec {
            label: "B (T)".into(),
            range: (0.0, 9.0),
        },
    );
    let mut hm = fan(48, 36, (-2.0, 2.0), (0.0, 9.0));
    hm.colors = two_colour();
    hm.resample = Resample::Nearest;
    p.heatmap = Some(hm);
    p.colorbar = Some(ColorBar {
        label: "R_{xx} (kΩ)".into(),
        width_mm: 2.5,
    });
    let red = LineStyle {
        color: [220, 30, 30],
        width_pt: 1.0,
        dash_pt: vec![],
        outline: Some([255, 255, 255]),
    };
    let dashed = LineStyle {
        color: [30, 160, 60],
        width_pt: 0.8,
        dash_pt: vec![3.0, 1.5],
        outline: None,
    };
    p.lines = vec![
        nu_line(2.0, 9.0, red.clone()),
        nu_line(-2.0, 9.0, red.clone()),
        nu_line(6.0, 9.0, dashed.clone()),
    ];
    p.labels = vec![TextLabel {
        text: "ν = 2".into(),
        anchors: vec![(density12(2.0, 6.0), 6.0)],
        color: [0, 0, 0],
        size_pt: 6.5,
        background: Some([255, 255, 255]),
    }];
    let shapes = [
        MarkerShape::Circle,
        MarkerShape::Square,
        MarkerShape::Triangle,
        MarkerShape::Diamond,
        MarkerShape::Cross,
    ];
    p.markers = shapes
        .iter()
        .enumerate()
        .map(|(k, &shape)| Markers {
            points: vec![(-1.6 + 0.4 * k as f64, 1.0)],
            style: MarkerStyle {
                shape,
                size_pt: 4.0,
                fill: [255, 220, 0],
                edge: [0, 0, 0],
            },
        })
        .collect();
    p.legend = Some(Legend {
        entries: vec![
            LegendEntry {
                swatch: Swatch::Line(red),
                text: "ν = ±2".into(),
            },
            LegendEntry {
                swatch: Swatch::Line(dashed),
                text: "ν = 6".into(),
            },
        ],
        corner: Corner::TopLeft,
    });
    fig.panels.push(p);
    fig
}

fn golden_dir() -> PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/golden")
}

fn decode(png: &[u8]) -> image::RgbaImage {
    image::load_from_memory(png)
        .expect("our PNG decodes")
        .to_rgba8()
}

#[test]
fn png_matches_the_committed_reference() {
    let png = raster::png_bytes(&small_scene()).unwrap();
    let path = golden_dir().join("small_scene.png");
    if std::env::var_os("FANMARK_BLESS").is_some() {
        std::fs::create_dir_all(golden_dir()).unwrap();
        std::fs::write(&path, &png).unwrap();
    }
    let reference = std::fs::read(&path)
        .unwrap_or_else(|_| panic!("{} missing: run with FANMARK_BLESS=1", path.display()));
    let (a, b) = (decode(&png), decode(&reference));
    assert_eq!(a.dimensions(), b.dimensions());
    let mut worst = 0u8;
    let mut off = 0usize;
    for (p, q) in a.pixels().zip(b.pixels()) {
        let d = (0..4).map(|k| p[k].abs_diff(q[k])).max().unwrap();
        worst = worst.max(d);
        if d > 2 {
            off += 1;
        }
    }
    assert!(
        off == 0,
        "{off} pixels differ by more than 2 (worst {worst})"
    );
}

#[test]
fn bands_draw_the_picture_one_pass_draws() {
    // Vector items drawn in parallel bands of 256 rows (and of 37, to cross many edges) give the
    // very bytes of one band over the whole page, and so do short runs drawn in one pass.
    let fig = demo_scene(178.0, 75.0, 2);
    let list = layout(&fig).unwrap();
    let mut layer = |p: &Panel, m: &super::heatmap::ColorMapping, w, h| {
        let hm = p.heatmap.as_ref().unwrap();
        std::rc::Rc::new(raster::heatmap_layer(
            hm,
            m,
            p.x_axis.range,
            p.y_axis.range,
            w,
            h,
        ))
    };
    let one = raster::draw_list_banded(&fig, &list, &mut layer, usize::MAX / 8, 0).unwrap();
    assert!(
        one.height() > 256,
        "{} rows: bands would not be tested",
        one.height()
    );
    for (rows, direct) in [(256, 0), (37, 0), (256, 64), (37, usize::MAX)] {
        let banded = raster::draw_list_banded(&fig, &list, &mut layer, rows, direct).unwrap();
        let (mut worst, mut differ) = (0u8, 0usize);
        for (p, q) in one.data().chunks(4).zip(banded.data().chunks(4)) {
            let d = (0..4).map(|k| p[k].abs_diff(q[k])).max().unwrap();
            worst = worst.max(d);
            differ += (d > 0) as usize;
        }
        assert!(
            differ == 0,
            "bands of {rows}, runs ≤ {direct} in one pass: {differ} pixels differ (worst {worst})"
        );
    }
}

#[test]
fn png_records_its_dpi_in_phys() {
    let fig = small_scene();
    let png = raster::png_bytes(&fig).unwrap();
    let dec = png::Decoder::new(std::io::Cursor::new(png));
    let reader = dec.read_info().expect("valid PNG with correct chunk CRCs");
    let info = reader.info();
    let dims = info.pixel_dims.expect("pHYs present");
    assert_eq!(dims.unit, png::Unit::Meter);
    // 150 dpi = 150 / 0.0254 m ≈ 5905.5 px/m (1 in = 25.4 mm exactly).
    assert_eq!(dims.xppu, 5906);
    assert_eq!(dims.yppu, 5906);
    // 70 mm at 150 dpi = 413.4 px; 50 mm = 295.3 px.
    assert_eq!((info.width, info.height), (413, 295));
}

#[test]
fn svg_is_xml_with_real_text_and_an_embedded_map() {
    let fig = small_scene();
    let s = svg::svg_string(&fig).unwrap();
    let doc = roxmltree::Document::parse(&s).expect("SVG parses as XML");
    let root = doc.root_element();
    assert_eq!(root.tag_name().name(), "svg");
    assert_eq!(root.attribute("width"), Some("70mm"));
    let texts: Vec<String> = root
        .descendants()
        .filter(|n| n.has_tag_name("text"))
        .map(|n| {
            n.descendants()
                .filter(|d| d.is_text())
                .filter_map(|d| d.text())
                .collect::<String>()
        })
        .collect();
    for want in [
        "B (T)",
        "n (1012 cm−2)",
        "Rxx (kΩ)",
        "ν = 2",
        "ν = ±2",
        "Device A1, Rxx",
    ] {
        assert!(
            texts.iter().any(|t| t == want),
            "no text {want:?} in {texts:?}"
        );
    }
    // Superscripts are separate spans, smaller and raised.
    let sup = root
        .descendants()
        .find(|n| {
            n.has_tag_name("tspan") && n.text() == Some("−2") && n.prev_sibling_element().is_some()
        })
        .expect("superscript span");
    let base = sup.prev_sibling_element().unwrap();
    let fsz = |n: roxmltree::Node| n.attribute("font-size").unwrap().parse::<f64>().unwrap();
    let y = |n: roxmltree::Node| n.attribute("y").unwrap().parse::<f64>().unwrap();
    assert!(fsz(sup) < fsz(base));
    assert!(y(sup) < y(base));
    // Tick labels use the true minus sign.
    assert!(texts.iter().any(|t| t == "\u{2212}2"));
    assert!(!texts.iter().any(|t| t.starts_with('-')));
    // Heat map embedded at the data's own resolution, nearest resampling.
    let img = root
        .descendants()
        .find(|n| n.has_tag_name("image") && n.attribute("clip-path").is_some())
        .expect("heat-map image");
    assert_eq!(img.attribute("style"), Some("image-rendering:pixelated"));
    let href = img.attribute("href").unwrap();
    let data = href
        .strip_prefix("data:image/png;base64,")
        .expect("PNG data URI");
    let png = decode_base64(data);
    let im = decode(&png);
    assert_eq!(im.dimensions(), (48, 36));
    // Lines are vector paths with the chosen dash pattern.
    assert!(root
        .descendants()
        .any(|n| n.has_tag_name("path") && n.attribute("stroke-dasharray") == Some("3 1.5")));
}

/// Independent decoder for the test (RFC 4648 alphabet).
fn decode_base64(s: &str) -> Vec<u8> {
    let val = |c: u8| match c {
        b'A'..=b'Z' => c - b'A',
        b'a'..=b'z' => c - b'a' + 26,
        b'0'..=b'9' => c - b'0' + 52,
        b'+' => 62,
        b'/' => 63,
        _ => panic!("bad base64 {c}"),
    } as u32;
    let bytes: Vec<u8> = s.bytes().filter(|&c| c != b'=').collect();
    let mut out = Vec::new();
    for ch in bytes.chunks(4) {
        let mut n = 0u32;
        for (k, &c) in ch.iter().enumerate() {
            n |= val(c) << (18 - 6 * k);
        }
        for k in 0..ch.len() - 1 {
            out.push((n >> (16 - 8 * k)) as u8);
        }
    }
    out
}

fn pdftoppm() -> Option<PathBuf> {
    std::env::var_os("PATH").and_then(|p| {
        std::env::split_paths(&p)
            .map(|d| d.join("pdftoppm"))
            .find(|f| f.is_file())
    })
}

fn pdf_to_png(pdf: &[u8], dpi: f64, dir: &Path, stem: &str) -> Option<PathBuf> {
    let tool = pdftoppm()?;
    let pdf_path = dir.join(format!("{stem}.pdf"));
    std::fs::write(&pdf_path, pdf).unwrap();
    let out = dir.join(stem);
    let st = std::process::Command::new(tool)
        .args(["-png", "-singlefile", "-r", &format!("{dpi}")])
        .arg(&pdf_path)
        .arg(&out)
        .status()
        .unwrap();
    assert!(st.success(), "pdftoppm failed");
    Some(dir.join(format!("{stem}.png")))
}

fn scratch(name: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("fanmark-figure-{}-{name}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn pdf_embeds_the_font_and_renders_like_the_png() {
    let fig = small_scene();
    let pdf = pdf::pdf_bytes(&fig).unwrap();
    assert!(pdf.starts_with(b"%PDF-"));
    let hay = String::from_utf8_lossy(&pdf);
    assert!(hay.contains("DejaVuSans"), "font not embedded");
    assert!(
        hay.contains("/FontFile2") || hay.contains("/FontFile3"),
        "no font program"
    );
    let dir = scratch("pdf-compare");
    let Some(png_path) = pdf_to_png(&pdf, fig.dpi, &dir, "small") else {
        println!("note: pdftoppm not on PATH; PDF rendering comparison skipped");
        return;
    };
    let from_pdf = image::open(&png_path).unwrap().to_rgba8();
    let ours = decode(&raster::png_bytes(&fig).unwrap());
    let (w, h) = ours.dimensions();
    let (pw, ph) = from_pdf.dimensions();
    assert!(
        w.abs_diff(pw) <= 1 && h.abs_diff(ph) <= 1,
        "{w}×{h} vs {pw}×{ph}"
    );
    let (cw, chh) = (w.min(pw), h.min(ph));
    let mut sum = 0u64;
    for y in 0..chh {
        for x in 0..cw {
            let (p, q) = (ours.get_pixel(x, y), from_pdf.get_pixel(x, y));
            sum += (0..3).map(|k| p[k].abs_diff(q[k]) as u64).sum::<u64>();
        }
    }
    let mean = sum as f64 / (cw as f64 * chh as f64 * 3.0);
    // Anti-aliasing and glyph hinting differ between renderers; the content must not.
    println!("PDF vs PNG: mean absolute difference {mean:.2} / 255");
    assert!(mean < 8.0, "mean absolute difference {mean:.2} / 255");
    std::fs::remove_dir_all(dir).unwrap();
}

#[test]
fn lines_are_drawn_where_the_data_says_and_clipped_to_the_panel() {
    let mut fig = Figure::new(60.0, 45.0);
    fig.dpi = 200.0;
    let mut p = Panel::new(
        AxisSpec {
            label: "x".into(),
            range: (0.0, 10.0),
        },
        AxisSpec {
            label: "y".into(),
            range: (0.0, 10.0),
        },
    );
    // A horizontal line at y = 5 extending far beyond both sides of the panel.
    p.lines.push(Polyline {
        points: vec![(-100.0, 5.0), (100.0, 5.0)],
        style: LineStyle::solid([255, 0, 0], 1.5),
    });
    fig.panels.push(p);
    let list = layout(&fig).unwrap();
    let frame = list
        .items
        .iter()
        .find_map(|i| match i {
            Item::Path {
                closed: true,
                points,
                ..
            } => Some(points.clone()),
            _ => None,
        })
        .unwrap();
    let (x0, y0, x1, y1) = (frame[0].0, frame[0].1, frame[2].0, frame[2].1);
    let pm = raster::draw_list(&fig, &list).unwrap();
    let s = pm.width() as f64 / list.width;
    let red = |x: u32, y: u32| {
        let c = pm.pixel(x, y).unwrap();
        c.red() > 200 && c.green() < 60 && c.blue() < 60
    };
    let mid_y = (((y0 + y1) / 2.0) * s) as u32;
    let mid_x = (((x0 + x1) / 2.0) * s) as u32;
    assert!(red(mid_x, mid_y), "the line passes the centre at y = 5");
    assert!(!red(mid_x, (y0 * s) as u32 + 10));
    // Nothing red outside the plot rectangle.
    for y in 0..pm.height() {
        for x in 0..pm.width() {
            let (fx, fy) = (x as f64 / s, y as f64 / s);
            if fx < x0 - 1.0 || fx > x1 + 1.0 || fy < y0 - 1.0 || fy > y1 + 1.0 {
                assert!(!red(x, y), "red outside the panel at {x},{y}");
            }
        }
    }
}

fn text_boxes(list: &super::draw::DisplayList) -> Vec<(f64, f64, f64, f64, f64)> {
    list.items
        .iter()
        .filter_map(|i| match i {
            Item::Text {
                block,
                x,
                y,
                vertical,
                ..
            } => {
                let min_size = block.spans.iter().map(|s| s.size).fold(f64::MAX, f64::min);
                Some(if *vertical {
                    (
                        x - block.ascent,
                        y - block.width,
                        x + block.descent,
                        *y,
                        min_size,
                    )
                } else {
                    (
                        *x,
                        y - block.ascent,
                        x + block.width,
                        y + block.descent,
                        min_size,
                    )
                })
            }
            _ => None,
        })
        .collect()
}

fn demo_scene(width_mm: f64, height_mm: f64, columns: usize) -> Figure {
    let mut fig = Figure::new(width_mm, height_mm);
    fig.dpi = 300.0;
    fig.columns = columns;
    fig.font_pt = 7.0;
    for k in 0..columns {
        let b_max = 12.0;
        let mut p = Panel::new(
            AxisSpec {
                label: "n (10^{12} cm^{−2})".into(),
                range: (-4.0, 4.0),
            },
            AxisSpec {
                label: "B (T)".into(),
                range: (0.0, b_max),
            },
        );
        let mut hm = fan(400, 300, (-4.0, 4.0), (0.0, b_max));
        if k == 1 {
            hm.colors = two_colour();
            hm.scale = ColorScale::Log;
        }
        p.heatmap = Some(hm);
        p.colorbar = Some(ColorBar {
            label: "R_{xx} (kΩ)".into(),
            width_mm: 2.5,
        });
        let b_ref = 9.0;
        p.top_axis = Some(SecondaryAxis {
            label: format!("ν at B = {b_ref} T"),
            map: Arc::new(move |n| filling(n, b_ref)),
        });
        // Flux per cell of an invented moiré lattice (λ = 14 nm): φ/φ₀ = B A e/h.
        let area = 3f64.sqrt() / 2.0 * 14e-9f64.powi(2);
        p.right_axis = Some(SecondaryAxis {
            label: "φ/φ_0".into(),
            map: Arc::new(move |b| b * area * E_OVER_H),
        });
        let style = LineStyle {
            color: [230, 40, 40],
            width_pt: 0.6,
            dash_pt: vec![],
            outline: Some([255, 255, 255]),
        };
        for nu in (-30..=30).filter(|v: &i32| (v.abs() - 2) % 4 == 0) {
            p.lines.push(nu_line(nu as f64, b_max, style.clone()));
            p.labels.push(TextLabel {
                text: super::ticks::minus_sign(&nu.to_string()),
                anchors: (4..=20)
                    .rev()
                    .map(|i| {
                        let b = b_max * i as f64 / 20.0;
                        (density12(nu as f64, b), b)
                    })
                    .collect(),
                color: [0, 0, 0],
                size_pt: 6.0,
                background: Some([255, 255, 255]),
            });
        }
        p.legend = Some(Legend {
            entries: vec![LegendEntry {
                swatch: Swatch::Line(style),
                text: "ν = ±2, ±6, …".into(),
            }],
            corner: Corner::BottomRight,
        });
        fig.panels.push(p);
    }
    fig
}

#[test]
fn demo_layout_keeps_text_on_the_page_legible_and_apart() {
    for (w, h, cols) in [(86.0, 70.0, 1), (178.0, 75.0, 2)] {
        let fig = demo_scene(w, h, cols);
        let list = layout(&fig).unwrap();
        let boxes = text_boxes(&list);
        assert!(boxes.len() > 20);
        for b in &boxes {
            assert!(b.0 >= -0.01 && b.1 >= -0.01, "text leaves the page: {b:?}");
            assert!(
                b.2 <= list.width + 0.01 && b.3 <= list.height + 0.01,
                "text leaves the page: {b:?}"
            );
        }
        // Normal-size text is at least 6 pt at print size.
        for b in &boxes {
            assert!(b.4 >= 6.0 * super::text::SCRIPT_SCALE - 1e-9);
        }
        let main: Vec<_> = boxes.iter().filter(|b| b.4 >= 6.0).collect();
        assert!(main.len() > 10);
        for (i, a) in boxes.iter().enumerate() {
            for b in &boxes[i + 1..] {
                let overlap =
                    a.0 < b.2 - 0.05 && b.0 < a.2 - 0.05 && a.1 < b.3 - 0.05 && b.1 < a.3 - 0.05;
                assert!(!overlap, "{w} mm: text boxes overlap {a:?} {b:?}");
            }
        }
    }
}

#[test]
fn large_axis_values_move_a_common_factor_into_the_label() {
    let mut fig = Figure::new(60.0, 45.0);
    // Density in cm⁻² on the axis: ticks 0…5 with ×10¹² in the label.
    fig.panels.push(Panel::new(
        AxisSpec {
            label: "n (cm^{-2})".into(),
            range: (0.0, 5e12),
        },
        AxisSpec {
            label: "B (T)".into(),
            range: (0.0, 1.0),
        },
    ));
    let list = layout(&fig).unwrap();
    let texts = list.texts();
    assert!(
        texts.iter().any(|t| t == "n (cm\u{2212}2)  ×1012"),
        "{texts:?}"
    );
    assert!(texts.iter().any(|t| t == "5"));
    assert!(!texts.iter().any(|t| t.contains("000")));
}

#[test]
fn bad_scenes_are_errors_not_panics() {
    let mut fig = small_scene();
    fig.panels[0].x_axis.range = (1.0, 1.0);
    let e = layout(&fig).unwrap_err().to_string();
    assert!(e.contains("panel 1") && e.contains("x axis range"), "{e}");
    let mut fig = small_scene();
    fig.panels[0].heatmap.as_mut().unwrap().colors.truncate(10);
    assert!(layout(&fig).unwrap_err().to_string().contains("256"));
    let mut fig = small_scene();
    fig.panels[0].top_axis = Some(SecondaryAxis {
        label: "bad".into(),
        map: Arc::new(|x| x * x),
    });
    assert!(layout(&fig).unwrap_err().to_string().contains("monotone"));
    let mut fig = small_scene();
    fig.width_mm = 8.0;
    assert!(layout(&fig).is_err());
    let mut fig = small_scene();
    fig.panels[0].lines[1].style.width_pt = f64::NAN;
    let e = layout(&fig).unwrap_err().to_string();
    assert!(e.contains("line 2"), "{e}");
    let mut fig = small_scene();
    fig.panels[0].labels[0].size_pt = 0.0;
    let e = layout(&fig).unwrap_err().to_string();
    assert!(e.contains("label 1") && e.contains("font size"), "{e}");
}

/// Writes demo figures (86 mm and 178 mm wide) as PNG and PDF, and the PDFs rasterised, into
/// `$FANMARK_DEMO_DIR`: `cargo test -p fanmark demo_figures -- --ignored`.
#[test]
#[ignore]
fn demo_figures() {
    let dir = PathBuf::from(
        std::env::var("FANMARK_DEMO_DIR").unwrap_or_else(|_| "target/figure-demo".into()),
    );
    std::fs::create_dir_all(&dir).unwrap();
    for (name, w, h, cols) in [("demo-86mm", 86.0, 70.0, 1), ("demo-178mm", 178.0, 75.0, 2)] {
        let fig = demo_scene(w, h, cols);
        let list = layout(&fig).unwrap();
        println!("{name}: {} labels dropped", list.dropped_labels);
        super::write(&fig, super::Format::Png, &dir.join(format!("{name}.png"))).unwrap();
        super::write(&fig, super::Format::Svg, &dir.join(format!("{name}.svg"))).unwrap();
        let pdf = pdf::pdf_bytes(&fig).unwrap();
        if let Some(p) = pdf_to_png(&pdf, 300.0, &dir, &format!("{name}-pdf")) {
            assert!(p.is_file());
        }
        assert!(dir.join(format!("{name}.png")).is_file());
    }
}

#[test]
fn legends_sit_in_their_corner_inside_the_plot() {
    for corner in [
        Corner::TopLeft,
        Corner::TopRight,
        Corner::BottomLeft,
        Corner::BottomRight,
    ] {
        let mut fig = small_scene();
        let p = &mut fig.panels[0];
        p.labels.clear();
        p.legend = Some(Legend {
            entries: vec![LegendEntry {
                swatch: Swatch::Marker(MarkerStyle {
                    shape: MarkerShape::Diamond,
                    size_pt: 4.0,
                    fill: [0, 90, 200],
                    edge: [0, 0, 0],
                }),
                text: "gap at ν = 5/2".into(),
            }],
            corner,
        });
        let list = layout(&fig).unwrap();
        assert!(list.texts().iter().any(|t| t == "gap at ν = 5/2"));
        let closed: Vec<&Vec<(f64, f64)>> = list
            .items
            .iter()
            .filter_map(|i| match i {
                Item::Path {
                    closed: true,
                    points,
                    fill: None,
                    stroke: Some(s),
                    ..
                } if s.color == [0, 0, 0] && points.len() == 4 => Some(points),
                _ => None,
            })
            .collect();
        let plot = closed[0];
        let legend = list
            .items
            .iter()
            .find_map(|i| match i {
                Item::Path {
                    fill: Some([255, 255, 255]),
                    stroke: Some(_),
                    points,
                    ..
                } => Some(points),
                _ => None,
            })
            .expect("legend box");
        let (px0, py0, px1, py1) = (plot[0].0, plot[0].1, plot[2].0, plot[2].1);
        let (lx0, ly0, lx1, ly1) = (legend[0].0, legend[0].1, legend[2].0, legend[2].1);
        assert!(
            lx0 > px0 && lx1 < px1 && ly0 > py0 && ly1 < py1,
            "{corner:?}"
        );
        let left = lx0 - px0 < px1 - lx1;
        let top = ly0 - py0 < py1 - ly1;
        let want = match corner {
            Corner::TopLeft => (true, true),
            Corner::TopRight => (false, true),
            Corner::BottomLeft => (true, false),
            Corner::BottomRight => (false, false),
        };
        assert_eq!((left, top), want, "{corner:?}");
    }
}

#[test]
fn a_reversed_axis_mirrors_the_heat_map() {
    let mut fig = Figure::new(50.0, 40.0);
    fig.dpi = 100.0;
    let mut p = Panel::new(
        AxisSpec {
            label: "x".into(),
            range: (0.0, 4.0),
        },
        AxisSpec {
            label: "y".into(),
            range: (0.0, 1.0),
        },
    );
    // Value = column index: a ramp in x.
    p.heatmap = Some(HeatMap {
        values: Array2::from_shape_fn((2, 4), |(_, j)| j as f64),
        x: vec![0.5, 1.5, 2.5, 3.5],
        y: vec![0.0, 1.0],
        colors: grey(),
        scale: ColorScale::Linear,
        range: ValueRange::Fixed(0.0, 3.0),
        resample: Resample::Nearest,
        missing: None,
    });
    fig.panels.push(p.clone());
    let mut flipped = fig.clone();
    flipped.panels[0].x_axis.range = (4.0, 0.0);
    let row = |f: &Figure| -> Vec<u8> {
        let list = layout(f).unwrap();
        let rect = list
            .items
            .iter()
            .find_map(|i| match i {
                Item::HeatMap { rect, .. } => Some(*rect),
                _ => None,
            })
            .unwrap();
        let pm = raster::draw_list(f, &list).unwrap();
        let s = pm.width() as f64 / list.width;
        let (x0, y0, x1, y1) = raster::pixel_rect(&rect, s);
        let y = ((y0 + y1) / 2) as u32;
        (x0 + 2..x1 - 2)
            .map(|x| pm.pixel(x as u32, y).unwrap().red())
            .collect()
    };
    let (a, b) = (row(&fig), row(&flipped));
    assert_eq!(a.first(), Some(&0));
    assert_eq!(a.last(), Some(&255));
    let mut rb = b.clone();
    rb.reverse();
    let differ = a.iter().zip(&rb).filter(|(p, q)| p != q).count();
    assert!(differ <= 2, "{differ} columns differ from the mirror image");
    // The SVG embeds the four cells, oriented for the page.
    let s = svg::svg_string(&flipped).unwrap();
    let doc = roxmltree::Document::parse(&s).unwrap();
    let img = doc
        .descendants()
        .find(|n| n.has_tag_name("image") && n.attribute("clip-path").is_some())
        .unwrap();
    let png = decode_base64(img.attribute("href").unwrap().split(',').nth(1).unwrap());
    let im = decode(&png);
    assert_eq!(im.dimensions(), (4, 2));
    let reds: Vec<u8> = (0..4).map(|x| im.get_pixel(x, 0)[0]).collect();
    assert_eq!(reds, vec![255, 170, 85, 0]);
}

#[test]
fn every_format_encodes() {
    let fig = small_scene();
    let png = super::encode(&fig, super::Format::Png).unwrap();
    assert_eq!(&png[1..4], b"PNG");
    let svg = super::encode(&fig, super::Format::Svg).unwrap();
    assert!(svg.starts_with(b"<?xml"));
    let pdf = super::encode(&fig, super::Format::Pdf).unwrap();
    assert!(pdf.starts_with(b"%PDF-"));
    let dir = scratch("write");
    let path = dir.join("fig.png");
    super::write(&fig, super::Format::Png, &path).unwrap();
    assert_eq!(std::fs::read(&path).unwrap(), png);
    std::fs::remove_dir_all(dir).unwrap();
}

/// Frame cost of the viewer's call; prints timings, asserts only that pixels were drawn:
/// `cargo test -p fanmark bench_render -- --ignored --nocapture` (use `--release` for figures).
#[test]
#[ignore]
fn bench_render_rgba() {
    let fig = demo_scene(178.0, 75.0, 2);
    let mut fig_screen = fig.clone();
    fig_screen.dpi = 150.0;
    for (name, f) in [("300 dpi", &fig), ("150 dpi", &fig_screen)] {
        let t = std::time::Instant::now();
        let list = layout(f).unwrap();
        let t_layout = t.elapsed();
        let pm = raster::draw_list(f, &list).unwrap();
        let t_all = t.elapsed();
        let t_png = std::time::Instant::now();
        let png = raster::encode_png(&pm, f.dpi).unwrap();
        println!(
            "{name}: {}×{} px, layout {:.1} ms, layout+draw {:.1} ms, PNG encode {:.1} ms ({} kB)",
            pm.width(),
            pm.height(),
            t_layout.as_secs_f64() * 1e3,
            t_all.as_secs_f64() * 1e3,
            t_png.elapsed().as_secs_f64() * 1e3,
            png.len() / 1024
        );
        assert!(pm.pixels().iter().any(|p| p.red() != 255));
    }
}

//! The analysis commands' `--figure` option run as a user would: `sdh` on the committed demo
//! measurement, `gaps` on a temperature series and `dualgate` on the dual-gate map, both
//! written by `synth`; each figure is decoded and its size checked against the request.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn demo(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../demo-data")
        .join(name)
}

fn tmp(name: &str) -> PathBuf {
    let dir = PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join("cli_quant");
    std::fs::create_dir_all(&dir).unwrap();
    dir.join(name)
}

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_fanmark"))
        .args(args)
        .output()
        .expect("the binary runs")
}

fn ok(o: &Output) -> String {
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout).into_owned()
}

/// Width and height in pixels of a PNG file.
fn png_size(path: &Path) -> (u32, u32) {
    let bytes = std::fs::read(path).expect("figure written");
    let reader = png::Decoder::new(std::io::Cursor::new(bytes))
        .read_info()
        .expect("a valid PNG");
    let info = reader.info();
    (info.width, info.height)
}

/// Pixels across `mm` at `dpi` (1 in = 25.4 mm).
fn px(mm: f64, dpi: f64) -> u32 {
    (mm / 25.4 * dpi).round() as u32
}

#[test]
fn sdh_figure_is_a_png_of_the_requested_width() {
    let out = tmp("wren.sdh.png");
    let csv = demo("wren.csv");
    // wren's truth: α = 7.562 372 81×10¹⁰ cm⁻² V⁻¹, V_CNP = 1.3 V.
    let stdout = ok(&run(&[
        "sdh",
        csv.to_str().unwrap(),
        "--at-density",
        "3",
        "--alpha-cm2-per-v",
        "7.56237281e10",
        "--v-cnp",
        "1.3",
        "--b-min",
        "4",
        "--b-max",
        "14",
        "--figure",
        out.to_str().unwrap(),
        "--figure-width-mm",
        "70",
        "--figure-dpi",
        "150",
    ]));
    assert!(stdout.contains("B_F"), "{stdout}");
    let (w, h) = png_size(&out);
    assert_eq!(w, px(70.0, 150.0));
    // Three stacked panels: taller than wide.
    assert!(2 * h > 3 * w, "{w} × {h}");
}

#[test]
fn gaps_and_dualgate_figures_from_synthesised_files() {
    let base = tmp("series/w.csv");
    ok(&run(&[
        "synth",
        "--device",
        "wren",
        "--out",
        base.to_str().unwrap(),
        "--temperatures",
        "25,40,65,100,170",
        "--size",
        "241x21",
    ]));
    let dir = base.parent().unwrap();
    let files: Vec<String> = [25, 40, 65, 100, 170]
        .iter()
        .map(|t| dir.join(format!("w-{t}K.csv")).display().to_string())
        .collect();
    assert!(dir.join("w.gaps.json").exists());
    let fig = tmp("gap.png");
    let mut args: Vec<&str> = vec!["gaps"];
    args.extend(files.iter().map(String::as_str));
    args.extend([
        "--nu",
        "6",
        "--at-b",
        "7",
        "--alpha-cm2-per-v",
        "7.56237281e10",
        "--v-cnp",
        "1.3",
        "--figure",
        fig.to_str().unwrap(),
    ]);
    let stdout = ok(&run(&args));
    assert!(stdout.contains("Δ ="), "{stdout}");
    // Default width 86 mm at 300 dpi.
    assert_eq!(png_size(&fig).0, px(86.0, 300.0));

    let dg = tmp("dunlin.csv");
    let stdout = ok(&run(&[
        "synth",
        "--device",
        "dunlin",
        "--out",
        dg.to_str().unwrap(),
    ]));
    // The printed command carries the device's gates; run it with a figure.
    let line = stdout
        .lines()
        .find(|l| l.contains("fanmark dualgate"))
        .expect("a dualgate command printed");
    let mut words: Vec<String> = line
        .split_once("fanmark ")
        .unwrap()
        .1
        .split_whitespace()
        .map(String::from)
        .collect();
    let svg = tmp("dunlin.nd.svg");
    for extra in [
        "--out",
        tmp("nd.csv").to_str().unwrap(),
        "--summary",
        tmp("nd.json").to_str().unwrap(),
        "--figure",
        svg.to_str().unwrap(),
    ] {
        words.push(extra.to_string());
    }
    let words: Vec<&str> = words.iter().map(String::as_str).collect();
    ok(&run(&words));
    let text = std::fs::read_to_string(&svg).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("valid SVG");
    // The SVG states the physical width asked for: 86 mm by default.
    let width = doc.root_element().attribute("width").unwrap();
    let mm: f64 = width.trim_end_matches("mm").parse().unwrap();
    assert!((mm - 86.0).abs() < 1e-6, "{width}");
}

#[test]
fn a_figure_with_an_unknown_extension_is_refused_before_any_work() {
    let o = run(&[
        "sdh",
        "no-such-file.csv",
        "--at-gate",
        "10",
        "--b-max",
        "9",
        "--figure",
        "out.jpg",
    ]);
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(
        e.contains("out.jpg") && e.contains(".png, .svg or .pdf"),
        "{e}"
    );
}

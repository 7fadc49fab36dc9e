//! The committed demo files are exactly what the generator makes from the demo configuration.

use fanmark_core::synth::{self, DeviceName, SynthConfig};
use std::path::PathBuf;

fn demo_dir() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR")).join("../demo-data")
}

#[test]
fn committed_demo_files_match_the_generator() {
    for device in DeviceName::ALL {
        let s = synth::generate(&SynthConfig::demo(device)).expect("demo config generates");
        let csv_path = demo_dir().join(format!("{device}.csv"));
        let truth_path = synth::truth_path_for(&csv_path);
        let regenerate = format!(
            "regenerate with `cargo run --release -- synth --device {device} --demo --out demo-data/{device}.csv`"
        );
        let csv = std::fs::read_to_string(&csv_path)
            .unwrap_or_else(|e| panic!("{}: {e}; {regenerate}", csv_path.display()));
        assert!(
            csv.len() <= 2_100_000,
            "{} is {} bytes, over ~2 MB",
            csv_path.display(),
            csv.len()
        );
        assert!(
            csv == s.csv_text(),
            "{} differs from the generator's output; {regenerate}",
            csv_path.display()
        );
        let truth = std::fs::read_to_string(&truth_path)
            .unwrap_or_else(|e| panic!("{}: {e}; {regenerate}", truth_path.display()));
        assert!(
            truth == s.truth_json().expect("truth serialises"),
            "{} differs from the generator's output; {regenerate}",
            truth_path.display()
        );
    }
}

#[test]
fn demo_truth_describes_its_device() {
    let text = std::fs::read_to_string(demo_dir().join("tern.truth.json")).expect("tern truth");
    let v: serde_json::Value = serde_json::from_str(&text).expect("valid JSON");
    assert_eq!(v["device"], "tern");
    // 30 nm hBN with ε_r 3.4: α = 6.263 20×10¹¹ cm⁻² V⁻¹ (check-values §3).
    let alpha = v["alpha_cm2_per_V"].as_f64().expect("alpha");
    assert!((alpha / 6.263_20e11 - 1.0).abs() < 2e-6);
    let kinds: Vec<&str> = v["states"]
        .as_array()
        .expect("states")
        .iter()
        .filter(|s| s["visible"] == true)
        .filter_map(|s| s["kind"].as_str())
        .collect();
    for k in [
        "integer",
        "broken_symmetry",
        "fractional",
        "wannier",
        "brown_zak",
    ] {
        assert!(kinds.contains(&k), "no visible {k} state in the tern demo");
    }
}

//! The `calibrate` and `index` commands run as a user would: the built binary on the committed
//! demo measurement, checking the JSON written (keys with units, rationals as "p/q" strings)
//! and the exit code and message on a bad file.

use std::path::{Path, PathBuf};
use std::process::{Command, Output};

fn demo(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
        .join("../demo-data")
        .join(name)
}

fn tmp(name: &str) -> PathBuf {
    PathBuf::from(env!("CARGO_TARGET_TMPDIR")).join(format!("cli_index_{name}"))
}

fn run(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_fanmark"))
        .args(args)
        .output()
        .expect("the binary runs")
}

fn json_of(path: &Path) -> serde_json::Value {
    let text = std::fs::read_to_string(path).expect("JSON written");
    serde_json::from_str(&text).expect("valid JSON")
}

fn truth(name: &str) -> serde_json::Value {
    json_of(&demo(name))
}

#[test]
fn calibrate_writes_the_lever_arm_with_units() {
    let out = tmp("wren_cal.json");
    let csv = demo("wren.csv");
    let o = run(&[
        "calibrate",
        csv.to_str().unwrap(),
        "--dielectric-nm",
        "285",
        "--json",
        out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v = json_of(&out);
    for key in [
        "alpha_cm2_per_V",
        "alpha_sigma_cm2_per_V",
        "v_cnp_V",
        "v_cnp_sigma_V",
        "method",
        "methods",
        "notes",
    ] {
        assert!(v.get(key).is_some(), "missing key {key}: {v}");
    }
    let t = truth("wren.truth.json");
    let alpha = v["alpha_cm2_per_V"].as_f64().unwrap();
    let true_alpha = t["alpha_cm2_per_V"].as_f64().unwrap();
    // Done-criteria of the calibration: α within 2 %, V_CNP within 0.3 V.
    assert!((alpha / true_alpha - 1.0).abs() < 0.02, "α {alpha}");
    let dv = v["v_cnp_V"].as_f64().unwrap() - t["v_cnp_V"].as_f64().unwrap();
    assert!(dv.abs() < 0.3, "ΔV_CNP {dv}");
    // The geometric estimate of 285 nm SiO₂ (ε_r 3.9) is listed: 7.562 37×10¹⁰ cm⁻² V⁻¹
    // (check-values §3).
    let geo = v["methods"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["method"] == "geometry")
        .expect("geometry estimate listed");
    assert!((geo["alpha_cm2_per_V"].as_f64().unwrap() / 7.562_37e10 - 1.0).abs() < 1e-5);
    let stdout = String::from_utf8_lossy(&o.stdout);
    assert!(stdout.contains("chosen"), "{stdout}");
}

#[test]
fn index_writes_states_with_rational_strings_and_units() {
    let out = tmp("wren_index.json");
    let csv_out = tmp("wren_index.csv");
    let csv = demo("wren.csv");
    let o = run(&[
        "index",
        csv.to_str().unwrap(),
        "--stack",
        "monolayer",
        "--json",
        out.to_str().unwrap(),
        "--csv",
        csv_out.to_str().unwrap(),
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v = json_of(&out);
    for key in [
        "format",
        "version",
        "stack",
        "calibration",
        "moire",
        "brown_zak",
        "states",
        "misalignment_fraction",
    ] {
        assert!(v.get(key).is_some(), "missing key {key}");
    }
    assert_eq!(v["format"], "fanmark-index");
    assert_eq!(v["stack"], "monolayer");
    assert!(v["moire"].is_null(), "a monolayer has no moiré estimate");
    assert!(v["calibration"]["alpha_cm2_per_V"].as_f64().unwrap() > 0.0);
    let states = v["states"].as_array().unwrap();
    assert!(!states.is_empty());
    for s in states {
        for key in ["kind", "t", "s", "score", "b_onset_T", "b_max_T", "flags"] {
            assert!(s.get(key).is_some(), "state without {key}: {s}");
        }
        let t = s["t"].as_str().expect("t is a string");
        assert!(
            t.split('/')
                .all(|p| p.trim_start_matches('-').parse::<u64>().is_ok()),
            "t = {t:?} is not p/q"
        );
        assert_eq!(s["s"], "0", "monolayer states have s = 0");
    }
    // The strongest gaps of the demo's monolayer are on the degenerate sequence: ν = ±2 are
    // found (and the truth marks them visible).
    let t = truth("wren.truth.json");
    for nu in ["2", "-2"] {
        assert!(t["states"]
            .as_array()
            .unwrap()
            .iter()
            .any(|x| x["t"] == nu && x["s"] == "0" && x["visible"] == true));
        assert!(states.iter().any(|s| s["t"] == nu), "ν = {nu} not found");
    }
    let table = std::fs::read_to_string(&csv_out).expect("CSV written");
    assert!(table.starts_with("kind,t,s,nu,score"), "{table}");
    assert_eq!(table.lines().count(), states.len() + 1);
}

#[test]
fn a_bad_file_gives_exit_code_2_and_names_the_file() {
    let bad = tmp("not_a_map.csv");
    std::fs::write(&bad, "vg_V,b_T,rxx_ohm\n1.0,abc,3\n").unwrap();
    for cmd in ["calibrate", "index"] {
        let o = run(&[cmd, bad.to_str().unwrap()]);
        assert_eq!(o.status.code(), Some(2), "{cmd}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains("not_a_map.csv"), "{cmd}: {err}");
    }
    let missing = tmp("does_not_exist.csv");
    let o = run(&["index", missing.to_str().unwrap()]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("does_not_exist.csv"));
}

//! Ingest benchmark: long-format CSV throughput (MB/s) of the reading half alone and of the whole
//! load with gridding, peak memory, and gridding time on a
//! 4000 × 1000 point map, with pandas' `read_csv` on the same file in the same run when Python
//! and pandas are available.
//!
//! `cargo bench -p fanmark-core --bench ingest [-- FILE.csv]`. Without a file, one is written
//! first (same layout as the shared baseline generator: `vg_V,b_T,rxx_ohm,rxy_ohm`, 10
//! significant digits, gate fastest).

use fanmark_core::grid::{grid_sweeps, GridOptions, SweepSet};
use fanmark_core::io::csv_long::read_points;
use fanmark_core::io::{load_map, write::long_csv_text, DuplicatePolicy, LoadOptions};
use fanmark_core::map::{ChannelKind, Quantity, RawSweep, SweepDirection};
use fanmark_core::progress::NoProgress;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

const NX: usize = 4000;
const NY: usize = 1000;

fn sweeps(jitter: bool) -> Vec<RawSweep> {
    let mut seed = 7u64;
    let mut rnd = move || {
        seed ^= seed << 13;
        seed ^= seed >> 7;
        seed ^= seed << 17;
        (seed >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    };
    (0..NY)
        .map(|j| {
            let b = 14.0 * j as f64 / (NY - 1) as f64;
            let swept: Vec<f64> = (0..NX)
                .map(|i| {
                    let v = -40.0 + 80.0 * i as f64 / (NX - 1) as f64;
                    if jitter {
                        v + 0.002 * rnd()
                    } else {
                        v
                    }
                })
                .collect();
            let rxx = swept
                .iter()
                .map(|&v| {
                    3000.0 / (1.0 + (v / 5.0).powi(2)).sqrt()
                        + 800.0 * (v * b / 3.0).cos().abs()
                        + rnd()
                })
                .collect();
            let rxy = swept
                .iter()
                .map(|&v| 25812.807 * b / (v.abs() + 1.0) + rnd())
                .collect();
            RawSweep {
                step_value: b,
                direction: SweepDirection::Up,
                first_line: 0,
                swept,
                values: vec![rxx, rxy],
            }
        })
        .collect()
}

fn peak_rss_mib() -> f64 {
    let s = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    s.lines()
        .find(|l| l.starts_with("VmHWM:"))
        .and_then(|l| l.split_whitespace().nth(1))
        .and_then(|k| k.parse::<f64>().ok())
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

/// Run this binary once with `mode` on `path` in a fresh process; its three printed numbers.
fn child_run(exe: &Path, mode: &str, path: &Path) -> [f64; 3] {
    let out = Command::new(exe)
        .arg(mode)
        .arg(path)
        .output()
        .expect("child");
    let f: Vec<f64> = String::from_utf8_lossy(&out.stdout)
        .split_whitespace()
        .filter_map(|x| x.parse().ok())
        .collect();
    assert_eq!(
        f.len(),
        3,
        "child failed: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    [f[0], f[1], f[2]]
}

fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    v[v.len() / 2]
}

fn main() {
    let args: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| a != "--bench")
        .collect();
    if args.first().map(String::as_str) == Some("--generate") {
        let text = long_csv_text(
            &["vg_V", "b_T", "rxx_ohm", "rxy_ohm"],
            &[1.0; 4],
            &sweeps(false),
            10,
        );
        std::fs::write(&args[1], text).expect("write benchmark file");
        return;
    }
    if args.first().map(String::as_str) == Some("--load-once") {
        let t = Instant::now();
        let m = load_map(Path::new(&args[1]), &LoadOptions::default(), &NoProgress).expect("load");
        let dt = t.elapsed().as_secs_f64();
        let bytes: usize = m.channels().iter().map(|c| c.data.len() * 8).sum();
        println!(
            "{dt} {} {}",
            peak_rss_mib(),
            bytes as f64 / (1 << 20) as f64
        );
        return;
    }
    if args.first().map(String::as_str) == Some("--read-once") {
        // The reading half alone: text → columns cut into sweeps, no gridding.
        let t = Instant::now();
        let p =
            read_points(Path::new(&args[1]), &LoadOptions::default(), &NoProgress).expect("read");
        let dt = t.elapsed().as_secs_f64();
        println!("{dt} {} {}", peak_rss_mib(), p.len());
        return;
    }
    let exe = std::env::current_exe().expect("own path");
    let path: PathBuf = match args.first() {
        Some(p) => PathBuf::from(p),
        None => {
            let p = std::env::temp_dir().join("fanmark-bench-4000x1000.csv");
            if !p.exists() {
                eprintln!("writing {}", p.display());
                let ok = Command::new(&exe)
                    .arg("--generate")
                    .arg(&p)
                    .status()
                    .map(|s| s.success());
                assert!(
                    matches!(ok, Ok(true)),
                    "generating the benchmark file failed"
                );
            }
            p
        }
    };
    let mb = std::fs::metadata(&path).expect("benchmark file").len() as f64 / 1e6;
    // Warm the page cache, then time whole loads (parse + grid), each in a fresh process so
    // the peak resident memory is the loader's alone.
    let _ = std::fs::read(&path);
    let loads: Vec<[f64; 3]> = (0..5)
        .map(|_| child_run(&exe, "--load-once", &path))
        .collect();
    let t = median(loads.iter().map(|f| f[0]).collect());
    let peak = loads.iter().map(|f| f[1]).fold(0.0, f64::max);
    let grid_mib = loads[loads.len() - 1][2];
    // The reading half alone (what pandas' read_csv does: text to columns), same file.
    let tr = median(
        (0..5)
            .map(|_| child_run(&exe, "--read-once", &path)[0])
            .collect(),
    );
    println!(
        "file            {} ({mb:.1} MB, {NX} × {NY} points)",
        path.display()
    );
    println!(
        "read (text → sweeps) median {:.3} s  →  {:.0} MB/s",
        tr,
        mb / tr
    );
    println!("load (read+grid) median {:.3} s  →  {:.0} MB/s", t, mb / t);
    println!(
        "peak RSS        {peak:.0} MiB  (gridded data {grid_mib:.0} MiB, ratio {:.2})",
        peak / grid_mib
    );
    // Gridding alone, regular and ragged (jittered sweep points → interpolation).
    for (name, jitter) in [("regular", false), ("ragged", true)] {
        let mut ts = Vec::new();
        for _ in 0..3 {
            let set = SweepSet {
                context: "bench".into(),
                swept_name: "vg_V".into(),
                swept_quantity: Quantity::Gate,
                stepped_name: "b_T".into(),
                stepped_quantity: Quantity::Field,
                channels: vec![
                    ("rxx".into(), ChannelKind::Rxx, String::new()),
                    ("rxy".into(), ChannelKind::Rxy, String::new()),
                ],
                sweeps: sweeps(jitter),
            };
            let t0 = Instant::now();
            let m = grid_sweeps(set, true, &GridOptions::default(), DuplicatePolicy::Average)
                .expect("grid");
            ts.push(t0.elapsed().as_secs_f64());
            assert!(m.shape().1 >= NX - 1);
        }
        println!("gridding {name:8} median {:.3} s", median(ts));
    }
    // pandas on the same file, same run.
    let py = "import sys,time\nimport pandas as pd\nts=[]\nfor _ in range(3):\n    t=time.perf_counter(); pd.read_csv(sys.argv[1]); ts.append(time.perf_counter()-t)\nts.sort(); print(ts[1])";
    match Command::new("python3")
        .arg("-c")
        .arg(py)
        .arg(&path)
        .output()
    {
        Ok(o) if o.status.success() => {
            let tp: f64 = String::from_utf8_lossy(&o.stdout)
                .trim()
                .parse()
                .unwrap_or(f64::NAN);
            println!(
                "pandas read_csv median {:.3} s  →  {:.0} MB/s;  fanmark/pandas throughput: \
                 reading {:.2}, whole load with gridding {:.2}",
                tp,
                mb / tp,
                tp / tr,
                tp / t
            );
        }
        _ => println!("pandas not available: install numpy and pandas to compare"),
    }
}

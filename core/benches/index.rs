//! Time and peak memory of the whole indexing job on a 4000 × 1000 map of the monolayer
//! device. The map is synthesised in-process; each measurement runs in a child process (this
//! binary re-run with `--child`) so VmHWM from /proc/self/status is the job's own peak.
//! Targets: under 5 s and under 1 GiB. Run: `cargo bench -p fanmark-core --bench index`.

use fanmark_core::index::stack::Stack;
use fanmark_core::index::{index_map, synthetic, IndexOptions};
use fanmark_core::synth::{generate, DeviceName, SynthConfig};
use std::process::Command;
use std::time::Instant;

const GATE_POINTS: usize = 4000;
const FIELD_POINTS: usize = 1000;

/// Peak resident set size (VmHWM) of this process, kB, or None off Linux.
fn vm_hwm_kb() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines()
        .find(|l| l.starts_with("VmHWM:"))?
        .split_whitespace()
        .nth(1)?
        .parse()
        .ok()
}

fn child() {
    let mut cfg = SynthConfig::demo(DeviceName::Wren);
    cfg.gate_points = GATE_POINTS;
    cfg.field_points = FIELD_POINTS;
    let t0 = Instant::now();
    let s = generate(&cfg).expect("synthesis");
    let map = synthetic::synthesis_map(&s).expect("gridding");
    drop(s);
    let synth_s = t0.elapsed().as_secs_f64();
    let before = vm_hwm_kb().unwrap_or(0);
    let t1 = Instant::now();
    let rep = index_map(&map, &IndexOptions::new(Stack::Monolayer)).expect("index");
    let index_s = t1.elapsed().as_secs_f64();
    let after = vm_hwm_kb().unwrap_or(0);
    let (rows, cols) = map.shape();
    println!(
        "{rows}x{cols} {synth_s:.3} {index_s:.3} {before} {after} {}",
        rep.states.len()
    );
}

fn main() {
    if std::env::args().any(|a| a == "--child") {
        child();
        return;
    }
    let exe = std::env::current_exe().expect("own path");
    let mut times = Vec::new();
    let mut peak_kb = 0u64;
    let mut before_kb = 0u64;
    let mut line = String::new();
    for _ in 0..3 {
        let out = Command::new(&exe)
            .arg("--child")
            .output()
            .expect("child run");
        if !out.status.success() {
            eprintln!("child failed: {}", String::from_utf8_lossy(&out.stderr));
            std::process::exit(1);
        }
        line = String::from_utf8_lossy(&out.stdout).trim().to_string();
        let f: Vec<&str> = line.split_whitespace().collect();
        times.push(f[2].parse::<f64>().unwrap_or(f64::NAN));
        before_kb = before_kb.max(f[3].parse().unwrap_or(0));
        peak_kb = peak_kb.max(f[4].parse().unwrap_or(0));
    }
    times.sort_by(f64::total_cmp);
    let f: Vec<&str> = line.split_whitespace().collect();
    println!(
        "index on {} map (wren, synthesised {} s): median {:.3} s (min {:.3}, max {:.3}); \
         peak memory (VmHWM of the child) {:.1} MiB after indexing, {:.1} MiB before it \
         (synthesis and the map); {} states",
        f[0],
        f[1],
        times[1],
        times[0],
        times[2],
        peak_kb as f64 / 1024.0,
        before_kb as f64 / 1024.0,
        f[5]
    );
    println!("targets: < 5 s, < 1024 MiB");
}

//! Benchmark: Savitzky–Golay first derivative (window 11, cubic) along the gate axis and the
//! resistivity → conductivity inversion on a 4000 × 1000 map (4000 gate points × 1000 fields).
//! Prints the median of several runs and the fraction of the memory bandwidth measured by a
//! plain copy of the same bytes in the same run. Target: SG + inversion under 100 ms.

use fanmark_core::conductivity::{sigma_arrays, SampleGeometry};
use fanmark_core::savgol::{savgol_2d, Along, SavgolSpec};
use ndarray::{Array2, Zip};
use std::hint::black_box;
use std::time::Instant;

const GATE_POINTS: usize = 4000;
const FIELDS: usize = 1000;
const RUNS: usize = 9;

fn median_ms(mut f: impl FnMut()) -> f64 {
    f(); // warm-up
    let mut t: Vec<f64> = (0..RUNS)
        .map(|_| {
            let s = Instant::now();
            f();
            s.elapsed().as_secs_f64() * 1e3
        })
        .collect();
    t.sort_by(|a, b| a.total_cmp(b));
    t[RUNS / 2]
}

fn main() {
    let vg: Vec<f64> = (0..GATE_POINTS)
        .map(|i| -5.0 + 10.0 * i as f64 / (GATE_POINTS - 1) as f64)
        .collect();
    let rxx = Array2::from_shape_fn((FIELDS, GATE_POINTS), |(r, c)| {
        let b = 0.01 * r as f64;
        1000.0 + 800.0 * (3.0 * vg[c] / (0.2 + 0.05 * b)).cos()
    });
    let rxy = Array2::from_shape_fn((FIELDS, GATE_POINTS), |(r, c)| {
        let b = 0.01 * r as f64;
        -2000.0 * b / vg[c].abs().max(0.05) * vg[c].signum()
    });
    let spec = SavgolSpec::new(11, 3, 1).expect("valid filter");
    let geometry = SampleGeometry::Squares(3.0);
    let bytes = (FIELDS * GATE_POINTS * std::mem::size_of::<f64>()) as f64;

    // Memory bandwidth: a plain copy of one map (read + write), serial and parallel.
    let mut dst = Array2::<f64>::zeros(rxx.dim());
    let copy_serial = median_ms(|| {
        dst.assign(&rxx);
        black_box(&dst);
    });
    let copy_par = median_ms(|| {
        Zip::from(&mut dst).and(&rxx).par_for_each(|d, &s| *d = s);
        black_box(&dst);
    });
    let copy_ms = copy_serial.min(copy_par);
    let bw = 2.0 * bytes / (copy_ms * 1e-3); // bytes/s moved by the copy

    let sg_ms = median_ms(|| {
        black_box(savgol_2d(rxx.view(), &vg, Along::X, spec).expect("filter"));
    });
    let inv_ms = median_ms(|| {
        black_box(sigma_arrays(&rxx, &rxy, &geometry).expect("inversion"));
    });
    let both_ms = median_ms(|| {
        let d = savgol_2d(rxx.view(), &vg, Along::X, spec).expect("filter");
        let s = sigma_arrays(&rxx, &rxy, &geometry).expect("inversion");
        black_box((d, s));
    });
    let sg_along_field_ms = median_ms(|| {
        let b: Vec<f64> = (0..FIELDS).map(|r| 0.01 * r as f64).collect();
        black_box(savgol_2d(rxx.view(), &b, Along::Y, spec).expect("filter"));
    });

    // Bytes each operation must move at least once: SG reads one map and writes one;
    // the inversion reads two and writes two.
    let frac = |moved: f64, ms: f64| moved / (ms * 1e-3) / bw;
    println!(
        "map {GATE_POINTS} gate points x {FIELDS} fields ({:.0} MB per channel), median of {RUNS} runs, {} threads",
        bytes / 1e6,
        rayon::current_num_threads()
    );
    println!(
        "plain copy:                   {copy_ms:8.2} ms  (serial {copy_serial:.2}, parallel {copy_par:.2}) -> {:.2} GB/s",
        bw / 1e9
    );
    println!(
        "SG d/dVg (w11, cubic):        {sg_ms:8.2} ms  ({:.0} % of copy bandwidth)",
        100.0 * frac(2.0 * bytes, sg_ms)
    );
    println!(
        "tensor inversion:             {inv_ms:8.2} ms  ({:.0} % of copy bandwidth)",
        100.0 * frac(4.0 * bytes, inv_ms)
    );
    println!(
        "SG + inversion:               {both_ms:8.2} ms  ({:.0} % of copy bandwidth)  target < 100 ms: {}",
        100.0 * frac(6.0 * bytes, both_ms),
        if both_ms < 100.0 { "met" } else { "NOT met" }
    );
    println!("SG along the field axis:      {sg_along_field_ms:8.2} ms");
}

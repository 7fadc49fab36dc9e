//! Timing of palette work: generating every built-in palette and the companion set from their
//! recipes, and colouring a 2000 × 2000 map through a palette table. Prints figures; run with
//! `cargo run --release -p fanmark-core --example palette_bench`.

use fanmark_core::palette;
use std::time::Instant;

fn main() {
    // Generation runs inside `builtin()` once; time it cold, then the cached call.
    let t0 = Instant::now();
    let n = palette::builtin().len();
    let gen = t0.elapsed();
    let t1 = Instant::now();
    let c = palette::companions().len();
    let comp = t1.elapsed();
    println!("generate {n} palettes: {:.1} ms", gen.as_secs_f64() * 1e3);
    println!(
        "choose {c} companion colours: {:.1} ms",
        comp.as_secs_f64() * 1e3
    );

    let p = &palette::builtin()[0];
    let (w, h) = (2000usize, 2000usize);
    let values: Vec<f64> = (0..w * h)
        .map(|i| ((i % w) as f64 / w as f64 + (i / w) as f64 / h as f64) * 0.5)
        .collect();
    let mut out = vec![[0u8; 3]; w * h];
    let reps = 5;
    let t2 = Instant::now();
    for _ in 0..reps {
        for (o, &v) in out.iter_mut().zip(&values) {
            *o = p.sample(v);
        }
    }
    let per = t2.elapsed().as_secs_f64() / f64::from(reps);
    let checksum: u64 = out.iter().map(|c| u64::from(c[0]) + u64::from(c[2])).sum();
    println!(
        "sample {}×{} map through `{}`: {:.1} ms ({:.2} ns per pixel; checksum {checksum})",
        w,
        h,
        p.name(),
        per * 1e3,
        per * 1e9 / (w * h) as f64
    );
}

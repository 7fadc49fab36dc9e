//! Frame time of the viewer's draw path (the `Renderer` the window uses), printed as median and
//! 95th percentile over many frames, with the peak resident memory of each case (VmHWM, reset
//! before each case through /proc/self/clear_refs where the kernel allows it):
//!
//! 1. a 1600 × 1000 window on a 4000 × 1000 synthetic moiré fan with every line family on, the
//!    indexer's states with their labels and twenty user labels: (a) full redraw with empty
//!    caches, (b) settled pan frames with the heat map sampled afresh every frame (as before
//!    pans reused samples) and (b1) with the kept samples moved and only the exposed strips
//!    sampled (axes and overlay drawn afresh in both; the two alternate frame by frame, so both
//!    see the same machine load), (b′) interim frames of a drag (the last
//!    heat map and overlay moved by the pan, what a window shows until the drag pauses),
//!    (w) wheel zoom frames drawn settled, notch by notch (what the window drew before), and
//!    (w′) wheel zoom interim frames (the settled picture scaled about the cursor), (c) pointer
//!    moves (cached base and overlay layers composited, only the pointer's own items drawn);
//! 2. a 10 000 × 10 000 map (10⁸ points): time to build the level-of-detail pyramid, then frames
//!    at the full view and zoomed in, panning (settled with and without moved samples, interim),
//!    and wheel zoom (settled and interim).
//!
//! Target: under 16 ms a frame for interaction (pointer moves, the frames of a drag and of the
//! wheel). Note the machine's load beside the numbers: frame times on a shared machine move with it.
//!
//! Run: `cargo bench -p fanmark --bench frame`.

use fanmark::viewer::data::{BuildOptions, ChannelChoice, ChannelData, ViewData};
use fanmark::viewer::draw::{Renderer, Reuse};
use fanmark::viewer::lod::Pyramid;
use fanmark::viewer::state::{Action, TypingPurpose, ViewState};
use fanmark_core::constants::E_OVER_H;
use fanmark_core::gate::SingleGate;
use fanmark_core::index::features::FeatureIndex;
use fanmark_core::index::stack::Stack;
use fanmark_core::line::Family;
use fanmark_core::map::{Axis, Channel, ChannelKind, Map, Quantity};
use ndarray::Array2;
use rayon::prelude::*;
use std::sync::Arc;
use std::time::Instant;

/// Window size of every benchmark frame, physical px.
const WINDOW: (u32, u32) = (1600, 1000);
/// Lever arm of the synthetic device, m⁻²/V (7·10¹⁰ cm⁻²/V).
const ALPHA: f64 = 7e14;
/// One carrier per moiré cell of the synthetic device, m⁻² (2.4·10¹² cm⁻²).
const N0: f64 = 2.4e16;

/// R_xx (Ω) of a fan with dips on ν = ±2, ±6, ±10, ±14 and on the s = ±4 satellite lines,
/// gate −40…40 V, field 0.5…9 T, `nx` × `ny` points.
fn fan(nx: usize, ny: usize) -> (Axis, Axis, Array2<f64>) {
    let x = Axis::uniform("vg", Quantity::Gate, -40.0, 80.0 / (nx - 1) as f64, nx).unwrap();
    let y = Axis::uniform("b", Quantity::Field, 0.5, 8.5 / (ny - 1) as f64, ny).unwrap();
    let (xv, yv) = (x.values().to_vec(), y.values().to_vec());
    let rows: Vec<f64> = (0..ny)
        .into_par_iter()
        .flat_map_iter(|i| {
            let b = yv[i];
            let nb = E_OVER_H * b;
            xv.iter()
                .map(move |&vg| {
                    let n = ALPHA * vg;
                    let mut dip = 0.0;
                    for s in [-4.0, 0.0, 4.0] {
                        let n = n - s * N0;
                        let nu = n / nb;
                        let k = ((nu.abs() - 2.0) / 4.0).round().max(0.0);
                        let near = nu.signum() * (4.0 * k + 2.0);
                        if near.abs() <= 14.0 {
                            dip += (-((n - near * nb) / (0.5 * nb)).powi(2)).exp();
                        }
                    }
                    100.0 + 1000.0 * (1.0 - dip.min(1.0))
                })
                .collect::<Vec<_>>()
        })
        .collect();
    (x, y, Array2::from_shape_vec((ny, nx), rows).unwrap())
}

fn stats(mut ms: Vec<f64>) -> (f64, f64) {
    ms.sort_by(f64::total_cmp);
    let q = |p: f64| ms[((ms.len() - 1) as f64 * p).round() as usize];
    (q(0.5), q(0.95))
}

fn report(what: &str, ms: Vec<f64>) {
    let n = ms.len();
    let (med, p95) = stats(ms);
    let verdict = if p95 < 16.0 { "under" } else { "OVER" };
    println!(
        "  {what:<52} median {med:6.2} ms   p95 {p95:6.2} ms   ({n} frames; {verdict} 16 ms; peak {:.0} MB)",
        peak_rss_mb()
    );
    reset_peak_rss();
}

/// Start a new peak-memory measurement: the kernel resets VmHWM to the current resident size
/// when "5" is written to /proc/self/clear_refs (ignored where that is not allowed).
fn reset_peak_rss() {
    let _ = std::fs::write("/proc/self/clear_refs", "5");
}

/// Wheel notches about the plot point at (0.37, 0.61) of the plot: four in, four out, so the
/// view comes back.
fn wheel(s: &mut ViewState, i: usize) {
    let p = s.plot;
    let (x, y) = (p.x0 + 0.37 * (p.x1 - p.x0), p.y0 + 0.61 * (p.y1 - p.y0));
    let f = if (i / 4) % 2 == 0 { 1.2 } else { 1.0 / 1.2 };
    s.apply(Action::ZoomAt(x, y, f));
}

/// Time `frames` settled renders, calling `step` on the state before each.
fn frames(
    r: &mut Renderer,
    s: &mut ViewState,
    n: usize,
    step: impl FnMut(&mut ViewState, usize),
) -> Vec<f64> {
    frames_with(r, s, n, step, None)
}

/// Settled pan frames, alternately with the kept heat-map samples forgotten first (untimed) so
/// that the frame samples the whole view, as settled pans did before they reused samples, and
/// with the samples kept and moved: the two sets of times, (afresh, moved), taken under the
/// same machine load. `step` pans before each frame.
fn pans_afresh_and_moved(
    r: &mut Renderer,
    s: &mut ViewState,
    n: usize,
    mut step: impl FnMut(&mut ViewState, usize),
) -> (Vec<f64>, Vec<f64>) {
    let (mut afresh, mut moved) = (Vec::new(), Vec::new());
    for i in 0..2 * n {
        if i % 2 == 0 {
            r.forget_heat_samples();
        }
        let t = frames_with(r, s, 1, |s, _| step(s, i / 2), None);
        if i % 2 == 0 { &mut afresh } else { &mut moved }.extend(t);
    }
    (afresh, moved)
}

/// Time `frames` renders, calling `step` on the state before each; with `reuse` each frame is
/// drawn as the window draws it during a drag (no settling passes).
fn frames_with(
    r: &mut Renderer,
    s: &mut ViewState,
    n: usize,
    mut step: impl FnMut(&mut ViewState, usize),
    reuse: Option<Reuse>,
) -> Vec<f64> {
    (0..n)
        .map(|i| {
            step(s, i);
            let t = Instant::now();
            let out = match reuse {
                Some(k) => r.render_with(s, WINDOW.0, WINDOW.1, k),
                None => r.render_settled(s, WINDOW.0, WINDOW.1, 1.0),
            }
            .expect("a frame");
            std::hint::black_box(out.pixmap.data()[0]);
            t.elapsed().as_secs_f64() * 1e3
        })
        .collect()
}

fn peak_rss_mb() -> f64 {
    std::fs::read_to_string("/proc/self/status")
        .ok()
        .and_then(|t| {
            t.lines()
                .find(|l| l.starts_with("VmHWM:"))
                .and_then(|l| l.split_whitespace().nth(1))
                .and_then(|v| v.parse::<f64>().ok())
        })
        .map_or(f64::NAN, |kb| kb / 1024.0)
}

fn dense_map() {
    println!("4000 × 1000 map, {}×{} window", WINDOW.0, WINDOW.1);
    let (x, y, rxx) = fan(4000, 1000);
    let mut map = Map::new(x, y);
    map.add_channel(Channel::new("rxx", ChannelKind::Rxx, rxx))
        .unwrap();
    let mut o = BuildOptions::new(Stack::MonolayerMoire);
    o.fallback_gate = SingleGate {
        alpha_m2_per_v: ALPHA,
        v_cnp: 0.0,
    };
    o.fallback_n0_m2 = Some(N0);
    let t = Instant::now();
    let vd = ViewData::build(map, None, String::new(), &o).unwrap();
    println!(
        "  view data built in {:.2} s ({} features, {} indexed states)",
        t.elapsed().as_secs_f64(),
        vd.features.points().len(),
        vd.states.len()
    );
    let mut s = ViewState::new(Arc::new(vd));
    for f in [
        Family::BrokenSymmetry,
        Family::CompositeFermion,
        Family::Satellite,
        Family::Wannier,
    ] {
        s.apply(Action::ToggleFamily(f));
    }
    for t in -10..10 {
        s.apply(Action::BeginTyping(TypingPurpose::NewLabel));
        for c in format!("{t} 0").chars() {
            s.apply(Action::Type(c));
        }
        s.apply(Action::Commit);
    }
    let mut r = Renderer::default();
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    println!(
        "  {} predicted lines shown, {} labels",
        s.shown_lines().len(),
        s.work.labels.len()
    );
    let mut cold = Vec::new();
    for _ in 0..20 {
        cold.extend(frames(&mut Renderer::default(), &mut s, 1, |_, _| {}));
    }
    report("(a) full redraw, empty caches", cold);
    reset_peak_rss();
    let pan = |s: &mut ViewState, i: usize| {
        let d = if (i / 15) % 2 == 0 { 7.0 } else { -7.0 };
        s.apply(Action::PanBy(d, 0.0));
    };
    let before = r.heat_reused;
    let (fresh, moved) = pans_afresh_and_moved(&mut r, &mut s, 60, pan);
    println!("  settled pans, alternately sampling afresh and moving the kept samples:");
    report("(b) pan, settled, heat map sampled afresh", fresh);
    report("(b1) pan, settled, heat samples moved", moved);
    println!(
        "  settled pans that moved the kept samples: {} of 60",
        r.heat_reused - before
    );
    // A drag: the first frame after a pause is settled, the rest are interim.
    let drag = |s: &mut ViewState, i: usize| {
        let d = if (i / 15) % 2 == 0 { 7.0 } else { -7.0 };
        s.apply(Action::PanBy(d, 0.0));
    };
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    let interim = frames_with(&mut r, &mut s, 60, drag, Some(Reuse::Interim));
    report("(b′) pan, interim: cached layers moved", interim);
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    report(
        "(w) wheel zoom, settled every notch",
        frames(&mut r, &mut s, 40, wheel),
    );
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    report(
        "(w′) wheel zoom, interim: settled picture scaled",
        frames_with(&mut r, &mut s, 40, wheel, Some(Reuse::Interim)),
    );
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    let (p0, p1) = (s.plot, s.plot);
    let overlay = frames(&mut r, &mut s, 60, |s, i| {
        let f = i as f64 / 60.0;
        s.apply(Action::Pointer(
            p0.x0 + f * (p1.x1 - p0.x0),
            0.5 * (p0.y0 + p0.y1),
        ));
    });
    report("(c) pointer move: cached layers composited", overlay);
    println!(
        "  heat-map layers made: {}, overlay layers drawn: {}",
        r.layers_made, r.overlays_made
    );
}

fn huge_map() {
    let (nx, ny) = (10_000, 10_000);
    println!(
        "{nx} × {ny} map (10⁸ points), {}×{} window",
        WINDOW.0, WINDOW.1
    );
    let t = Instant::now();
    let (x, y, rxx) = fan(nx, ny);
    println!("  values made in {:.2} s", t.elapsed().as_secs_f64());
    let t = Instant::now();
    let pyramid = Pyramid::new(rxx);
    println!(
        "  pyramid built in {:.2} s ({} levels)",
        t.elapsed().as_secs_f64(),
        pyramid.levels.len()
    );
    // The map keeps only its axes here; the pyramid's level 0 holds the values once.
    let map = Map::new(x, y);
    let vd = ViewData {
        map,
        source: None,
        checksum: String::new(),
        gate: SingleGate {
            alpha_m2_per_v: ALPHA,
            v_cnp: 0.0,
        },
        n0_m2: Some(N0),
        stack: Stack::MonolayerMoire,
        channels: vec![ChannelData {
            choice: ChannelChoice::Rxx,
            pyramid,
        }],
        features: FeatureIndex::new(Vec::new(), 80.0, 8.5).unwrap(),
        states: Vec::new(),
        sigma_xy_e2h: None,
        notes: Vec::new(),
    };
    let mut s = ViewState::new(Arc::new(vd));
    s.apply(Action::ToggleFamily(Family::Satellite));
    let mut r = Renderer::default();
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    let pan = |s: &mut ViewState, i: usize| {
        let d = if (i / 15) % 2 == 0 { 9.0 } else { -9.0 };
        s.apply(Action::PanBy(
            d,
            4.0 * if (i / 5) % 2 == 0 { 1.0 } else { -1.0 },
        ));
    };
    println!(
        "  peak resident memory while building (VmHWM): {:.0} MB",
        peak_rss_mb()
    );
    reset_peak_rss();
    let before = r.heat_reused;
    let (fresh, moved) = pans_afresh_and_moved(&mut r, &mut s, 40, pan);
    report("full view, panning, settled, sampled afresh", fresh);
    report("full view, panning, settled, samples moved", moved);
    println!(
        "  ({} of 40 moved the kept samples)",
        r.heat_reused - before
    );
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    report(
        "full view, panning, interim",
        frames_with(&mut r, &mut s, 40, pan, Some(Reuse::Interim)),
    );
    let zoom = frames(&mut r, &mut s, 20, |s, i| {
        s.apply(Action::Zoom(if i < 10 { 1.6 } else { 1.0 / 1.6 }));
    });
    report("zooming in ×1.6 and out, frame by frame", zoom);
    for _ in 0..10 {
        s.apply(Action::Zoom(1.6));
    }
    println!(
        "  zoomed in: {:.4} V × {:.4} T shown",
        s.view.x1 - s.view.x0,
        s.view.y1 - s.view.y0
    );
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    let before = r.heat_reused;
    let (fresh, moved) = pans_afresh_and_moved(&mut r, &mut s, 40, pan);
    report("zoomed in ×110 (level 0), panning, settled, afresh", fresh);
    report("zoomed in ×110 (level 0), panning, settled, moved", moved);
    println!(
        "  ({} of 40 moved the kept samples)",
        r.heat_reused - before
    );
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    report(
        "zoomed in, wheel zoom, settled every notch",
        frames(&mut r, &mut s, 40, wheel),
    );
    r.render_settled(&mut s, WINDOW.0, WINDOW.1, 1.0).unwrap();
    report(
        "zoomed in, wheel zoom, interim",
        frames_with(&mut r, &mut s, 40, wheel, Some(Reuse::Interim)),
    );
}

fn main() {
    // `cargo bench` passes `--bench`; nothing to parse.
    dense_map();
    huge_map();
    println!(
        "peak resident memory since the last case (VmHWM): {:.0} MB",
        peak_rss_mb()
    );
}

//! The map of a synthetic measurement, gridded as a loaded file would be (for tests and
//! benchmarks that run in-process).

use crate::error::Result;
use crate::grid::{grid_sweeps, GridOptions, SweepSet};
use crate::io::DuplicatePolicy;
use crate::map::{ChannelKind, Map, Quantity};
use crate::synth::Synthesis;

/// Grid the sweeps of `s` into a map: x = gate (V), y = field (T), channels `rxx`, `rxy` (Ω).
pub fn synthesis_map(s: &Synthesis) -> Result<Map> {
    let set = SweepSet {
        context: "synthetic measurement".into(),
        swept_name: s.headers[0].clone(),
        swept_quantity: Quantity::Gate,
        stepped_name: s.headers[1].clone(),
        stepped_quantity: Quantity::Field,
        channels: vec![
            ("rxx".into(), ChannelKind::Rxx, String::new()),
            ("rxy".into(), ChannelKind::Rxy, String::new()),
        ],
        sweeps: s.sweeps.clone(),
    };
    grid_sweeps(set, true, &GridOptions::default(), DuplicatePolicy::Average)
}

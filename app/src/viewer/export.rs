//! Labels as files in the `index` schema: the same CSV columns and JSON state objects the
//! indexer writes, one per visible or hidden label, flagged `hand_labelled`.

use super::state::{Label, ViewState};
use fanmark_core::index::run::{classify, IndexedState};
use fanmark_core::{Error, Result};
use std::fmt::Write as _;

/// The CSV header of indexed states.
pub const CSV_HEADER: &str =
    "kind,t,s,nu,score,t_stat,b_onset_T,b_max_T,hall_sigma_xy_e2h,hall_verdict,flags";

/// One label as an indexed state: class from (t, s), field range from its evidence, the Hall
/// check of the reading in use; score and t-statistic are 0 (a person found it, not the filter).
pub fn label_state(s: &ViewState, l: &Label) -> IndexedState {
    let (kind, mut flags) = classify(s.data.stack, l.t, l.s);
    flags.push("hand_labelled".into());
    if l.hidden {
        flags.push("hidden".into());
    }
    let b = l.evidence.picks.iter().map(|p| p.field_t);
    let lo = b.clone().fold(f64::INFINITY, f64::min);
    let hi = b.fold(f64::NEG_INFINITY, f64::max);
    let hall = l
        .evidence
        .readings
        .get(l.reading)
        .and_then(|r| r.hall.clone())
        .or_else(|| {
            let m = &s.data.map;
            s.data.hall_check(l.t, l.s, m.y().min(), m.y().max())
        });
    IndexedState {
        kind,
        t: l.t,
        s: l.s,
        nu: l.s.is_zero().then_some(l.t),
        score: 0.0,
        t_stat: 0.0,
        b_onset_t: lo.is_finite().then_some(lo),
        b_max_t: hi.is_finite().then_some(hi),
        confidence: match hall.as_ref().map(|h| h.verdict.as_str()) {
            Some("contradicts") => fanmark_core::index::run::HALL_CONTRADICTION_CONFIDENCE,
            _ => 1.0,
        },
        hall_check: hall,
        flags,
    }
}

/// (CSV text, JSON text) of every label.
pub fn labels_files(s: &ViewState) -> Result<(String, String)> {
    let states: Vec<IndexedState> = s.work.labels.iter().map(|l| label_state(s, l)).collect();
    let mut csv = format!("{CSV_HEADER}\n");
    for st in &states {
        let _ = writeln!(
            csv,
            "{:?},{},{},{},{:.4},{:.3},{},{},{},{},{}",
            st.kind,
            st.t,
            st.s,
            st.nu.map(|n| n.to_string()).unwrap_or_default(),
            st.score,
            st.t_stat,
            st.b_onset_t.map(|v| v.to_string()).unwrap_or_default(),
            st.b_max_t.map(|v| v.to_string()).unwrap_or_default(),
            st.hall_check
                .as_ref()
                .map(|h| h.sigma_xy_e2h.to_string())
                .unwrap_or_default(),
            st.hall_check
                .as_ref()
                .map(|h| h.verdict.clone())
                .unwrap_or_default(),
            st.flags.join(";")
        );
    }
    let json = serde_json::to_string_pretty(&states)
        .map_err(|e| Error::invalid("labels", format!("could not be serialised: {e}")))?;
    Ok((csv, json + "\n"))
}

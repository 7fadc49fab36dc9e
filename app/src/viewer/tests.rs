//! Unit tests of the pure viewer state: actions on a small synthetic fan, no display.

use super::data::{BuildOptions, ChannelChoice, ViewData};
use super::keys::{action_for, bindings, Key};
use super::state::*;
use fanmark_core::constants::{E_OVER_H, VON_KLITZING_R_K};
use fanmark_core::gate::SingleGate;
use fanmark_core::index::stack::Stack;
use fanmark_core::map::{Axis, Channel, ChannelKind, Map, Quantity};
use fanmark_core::Rational;
use ndarray::Array2;
use std::sync::{Arc, OnceLock};

/// Lever arm of the test device, m⁻²/V (7·10¹⁰ cm⁻²/V, a typical hBN/graphite gate).
pub const ALPHA: f64 = 7e14;

/// A monolayer fan: R_xx dips on ν = ±2, ±6, ±10, ±14 with R_xy on the matching plateaus.
pub fn fan_map(nx: usize, ny: usize) -> Map {
    let x = Axis::uniform("vg", Quantity::Gate, -40.0, 80.0 / (nx - 1) as f64, nx).unwrap();
    let y = Axis::uniform("b", Quantity::Field, 0.5, 8.5 / (ny - 1) as f64, ny).unwrap();
    let (xv, yv) = (x.values().to_vec(), y.values().to_vec());
    let mut rxx = Array2::zeros((ny, nx));
    let mut rxy = Array2::zeros((ny, nx));
    for (i, &b) in yv.iter().enumerate() {
        let nb = E_OVER_H * b;
        for (j, &vg) in xv.iter().enumerate() {
            let n = ALPHA * vg;
            let mut dip = 0.0;
            for nu in [-14.0, -10.0, -6.0, -2.0, 2.0, 6.0, 10.0, 14.0] {
                dip += (-((n - nu * nb) / (0.5 * nb)).powi(2)).exp();
            }
            rxx[[i, j]] = 100.0 + 1000.0 * (1.0 - dip.min(1.0));
            let nu = n / nb;
            let plateau = if nu.abs() < 0.5 {
                f64::INFINITY
            } else {
                nu.signum() * (4.0 * ((nu.abs() - 2.0) / 4.0).round().max(0.0) + 2.0)
            };
            rxy[[i, j]] = VON_KLITZING_R_K / plateau;
        }
    }
    let mut m = Map::new(x, y);
    m.add_channel(Channel::new("rxx", ChannelKind::Rxx, rxx))
        .unwrap();
    m.add_channel(Channel::new("rxy", ChannelKind::Rxy, rxy))
        .unwrap();
    m
}

/// The shared test data (built once).
pub fn data() -> Arc<ViewData> {
    static D: OnceLock<Arc<ViewData>> = OnceLock::new();
    D.get_or_init(|| {
        let mut o = BuildOptions::new(Stack::Monolayer);
        o.index = false;
        o.fallback_gate = SingleGate {
            alpha_m2_per_v: ALPHA,
            v_cnp: 0.0,
        };
        Arc::new(ViewData::build(fan_map(321, 86), None, String::new(), &o).unwrap())
    })
    .clone()
}

fn state() -> ViewState {
    let mut s = ViewState::new(data());
    s.apply(Action::PlotArea(PlotArea {
        x0: 100.0,
        y0: 50.0,
        x1: 1100.0,
        y1: 750.0,
    }));
    s
}

fn close(a: f64, b: f64, rel: f64) -> bool {
    (a - b).abs() <= rel * a.abs().max(b.abs()).max(1e-300)
}

#[test]
fn full_view_covers_the_map_in_gate_volts_and_tesla() {
    let s = state();
    assert_eq!((s.view.x0, s.view.x1), (-40.0, 40.0));
    assert_eq!((s.view.y0, s.view.y1), (0.5, 9.0));
    // The plot's corners are the map's corners (y up on screen).
    let (x, y) = s.px_to_frame(100.0, 750.0);
    assert!(close(x, -40.0, 1e-12) && close(y, 0.5, 1e-12));
}

#[test]
fn panning_moves_the_content_with_the_pointer() {
    let mut s = state();
    let before = s.px_to_frame(400.0, 300.0);
    s.apply(Action::PanBy(50.0, -20.0));
    let after = s.px_to_frame(450.0, 280.0);
    assert!(close(before.0, after.0, 1e-12) && close(before.1, after.1, 1e-12));
    // 50 px of a 1000 px plot spanning 80 V is 4 V.
    assert!(close(s.view.x0, -44.0, 1e-12));
}

#[test]
fn dragging_with_the_left_button_pans_and_a_click_does_not() {
    let mut s = state();
    let v0 = s.view;
    s.apply(Action::Pointer(500.0, 400.0));
    s.apply(Action::Press(Button::Left, false));
    s.apply(Action::Pointer(502.0, 401.0));
    assert_eq!(
        s.view, v0,
        "a jitter under the click tolerance does not pan"
    );
    s.apply(Action::Pointer(600.0, 400.0));
    s.apply(Action::Release(Button::Left));
    assert!(
        close(s.view.x0, -40.0 - 100.0 * 0.08 + 2.0 * 0.08, 1e-9),
        "{:?}",
        s.view
    );
}

#[test]
fn wheel_zoom_keeps_the_point_under_the_pointer() {
    let mut s = state();
    let p = (321.0, 654.0);
    let before = s.px_to_frame(p.0, p.1);
    s.apply(Action::ZoomAt(p.0, p.1, 2.0));
    let after = s.px_to_frame(p.0, p.1);
    assert!(close(before.0, after.0, 1e-12) && close(before.1, after.1, 1e-12));
    assert!(close(s.view.x1 - s.view.x0, 40.0, 1e-12));
    assert!(close(s.view.y1 - s.view.y0, 4.25, 1e-12));
}

#[test]
fn wheel_zoom_out_stops_at_four_times_the_map_in_each_axis() {
    use super::state::{FrameKind, MAX_ZOOM_OUT};
    for frame in [FrameKind::GateField, FrameKind::DensityField] {
        let mut s = state();
        s.apply(Action::SetFrame(frame));
        s.apply(Action::ResetView);
        let full = s.full_view(frame);
        let (fw, fh) = (full.x1 - full.x0, full.y1 - full.y0);
        let p = (400.0, 300.0);
        let kept = s.px_to_frame(p.0, p.1);
        // Thirty notches out would make the view 1.2^30 ≈ 237 times wider without the limit.
        for _ in 0..30 {
            s.apply(Action::ZoomAt(p.0, p.1, 1.0 / 1.2));
        }
        let (w, h) = (s.view.x1 - s.view.x0, s.view.y1 - s.view.y0);
        assert!(close(w, MAX_ZOOM_OUT * fw, 1e-9), "{frame:?}: {w} vs {fw}");
        assert!(close(h, MAX_ZOOM_OUT * fh, 1e-9), "{frame:?}: {h} vs {fh}");
        // The point under the pointer stayed put all the way.
        let now = s.px_to_frame(p.0, p.1);
        assert!(close(kept.0, now.0, 1e-9) && close(kept.1, now.1, 1e-9));
        // At the limit a further notch out changes nothing; one in still zooms.
        let at_limit = s.view;
        s.apply(Action::ZoomAt(p.0, p.1, 0.5));
        assert_eq!(s.view, at_limit);
        s.apply(Action::ZoomAt(p.0, p.1, 1.2));
        assert!(close(s.view.x1 - s.view.x0, MAX_ZOOM_OUT * fw / 1.2, 1e-9));
    }
}

#[test]
fn box_zoom_shows_exactly_the_box() {
    let mut s = state();
    let a = s.px_to_frame(200.0, 600.0);
    let b = s.px_to_frame(700.0, 100.0);
    s.apply(Action::Pointer(700.0, 100.0));
    s.apply(Action::ZoomBox((700.0, 100.0), (200.0, 600.0)));
    assert!(close(s.view.x0, a.0, 1e-12) && close(s.view.x1, b.0, 1e-12));
    assert!(close(s.view.y0, a.1, 1e-12) && close(s.view.y1, b.1, 1e-12));
    s.apply(Action::ResetView);
    assert_eq!((s.view.x0, s.view.x1), (-40.0, 40.0));
}

#[test]
fn frame_switch_keeps_the_physical_point_under_the_pointer() {
    let mut s = state();
    s.apply(Action::ZoomAt(600.0, 300.0, 1.7));
    let p = (640.0, 260.0);
    s.apply(Action::Pointer(p.0, p.1));
    let (_, n, b) = s.px_to_physical(p.0, p.1).unwrap();
    for k in [
        FrameKind::DensityField,
        FrameKind::FillingField,
        FrameKind::GateField,
        FrameKind::FillingField,
        FrameKind::DensityField,
    ] {
        s.apply(Action::SetFrame(k));
        assert_eq!(s.frame, k);
        let (_, n2, b2) = s.px_to_physical(p.0, p.1).unwrap();
        assert!(close(n, n2, 1e-9) && close(b, b2, 1e-9), "{k:?}: {n2} {b2}");
    }
    // Without a moiré cell the Wannier frame is refused and the frame stays.
    s.apply(Action::SetFrame(FrameKind::Wannier));
    assert_eq!(s.frame, FrameKind::DensityField);
    assert_eq!(s.frames().len(), 3);
}

#[test]
fn filling_frame_puts_constant_nu_lines_vertical() {
    let mut s = state();
    s.apply(Action::SetFrame(FrameKind::FillingField));
    // ν = 6 at two fields lands on the same pixel column.
    let a = s.physical_to_px(6.0 * E_OVER_H * 3.0, 3.0).unwrap();
    let b = s.physical_to_px(6.0 * E_OVER_H * 8.0, 8.0).unwrap();
    assert!((a.0 - b.0).abs() < 1e-6 && (a.1 - b.1).abs() > 100.0);
}

#[test]
fn snapping_picks_the_nearest_feature_within_the_radius() {
    let mut s = state();
    assert!(!s.data.features.points().is_empty());
    let target = (6.0 * E_OVER_H * 6.0, 6.0);
    let (px, py) = s.physical_to_px(target.0, target.1).unwrap();
    let p = (px + 3.0, py - 2.0);
    s.apply(Action::Pointer(p.0, p.1));
    let (g, b, _) = s.snapped().expect("a feature within 12 px");
    // Brute force: the nearest feature point in pixels.
    let best = s
        .data
        .features
        .points()
        .iter()
        .map(|m| {
            let q = s.physical_to_px(ALPHA * m.gate_v, m.field_t).unwrap();
            ((q.0 - p.0).hypot(q.1 - p.1), m)
        })
        .min_by(|a, b| a.0.total_cmp(&b.0))
        .unwrap();
    assert_eq!((g, b), (best.1.gate_v, best.1.field_t));
    // The snapped feature sits on ν = 6 to within a grid step.
    assert!((ALPHA * g / (E_OVER_H * b) - 6.0).abs() < 0.2);
    // Far from every feature nothing snaps; with snapping off nothing snaps.
    s.apply(Action::ToggleSnap);
    assert!(s.snapped().is_none());
}

/// Pick points on the ν = `nu` ridge at the given fields.
fn pick_ridge(s: &mut ViewState, nu: f64, fields: &[f64]) {
    for &b in fields {
        let (x, y) = s.physical_to_px(nu * E_OVER_H * b, b).unwrap();
        s.apply(Action::Pointer(x + 2.0, y));
        s.apply(Action::PickHere);
    }
}

#[test]
fn a_ridge_reads_as_its_filling_and_accept_undo_redo_work() {
    let mut s = state();
    // Raw pointer points (snapping is tested on its own).
    s.apply(Action::ToggleSnap);
    pick_ridge(&mut s, 6.0, &[3.0, 4.5, 6.0, 7.5, 8.5]);
    assert_eq!(s.work.picks.len(), 5);
    let fit = s.fit.expect("a free fit of five points");
    assert!(
        close(fit.slope / E_OVER_H, 6.0, 0.05),
        "slope {}",
        fit.slope / E_OVER_H
    );
    let best = &s.readings[0];
    assert_eq!(best.candidate.t, Rational::integer(6));
    assert_eq!(best.candidate.s, Rational::ZERO);
    // R_xy sits on h/6e² along the line: the Hall check agrees.
    assert_eq!(best.hall.as_ref().unwrap().verdict, "agrees");
    s.apply(Action::Accept);
    assert_eq!(s.work.labels.len(), 1);
    assert_eq!(s.work.labels[0].t, Rational::integer(6));
    assert!(s.work.picks.is_empty());
    assert_eq!(s.work.labels[0].evidence.picks.len(), 5);
    s.apply(Action::Undo);
    assert!(s.work.labels.is_empty());
    assert_eq!(s.work.picks.len(), 5, "undo brings the ridge back");
    s.apply(Action::Redo);
    assert_eq!(s.work.labels.len(), 1);
    assert_eq!(s.work.labels[0].shown_text(), "ν = 6");
    // Each pick was one undo step too.
    for _ in 0..6 {
        s.apply(Action::Undo);
    }
    assert!(s.work.labels.is_empty() && s.work.picks.is_empty());
    s.apply(Action::Undo);
    assert_eq!(s.message, "nothing to undo");
}

#[test]
fn accept_without_a_ridge_changes_nothing() {
    let mut s = state();
    let r = s.revision;
    s.apply(Action::Accept);
    assert!(s.work.labels.is_empty());
    assert_eq!(s.revision, r);
    assert!(s.undo.is_empty());
}

#[test]
fn typed_labels_rename_hide_retarget_and_delete() {
    let mut s = state();
    s.apply(Action::BeginTyping(TypingPurpose::NewLabel));
    for c in "-1/3 2/3".chars() {
        s.apply(Action::Type(c));
    }
    s.apply(Action::Commit);
    let l = &s.work.labels[0];
    assert_eq!(
        (l.t, l.s),
        (Rational::new(-1, 3).unwrap(), Rational::new(2, 3).unwrap())
    );
    assert_eq!(l.shown_text(), "(-1/3, 2/3)");
    s.apply(Action::BeginTyping(TypingPurpose::Rename));
    for c in "CI".chars() {
        s.apply(Action::Type(c));
    }
    s.apply(Action::Commit);
    assert_eq!(s.work.labels[0].shown_text(), "CI");
    s.apply(Action::ToggleHidden);
    assert!(s.work.labels[0].hidden);
    // A typed label has no other reading to move to.
    s.apply(Action::Retarget);
    assert_eq!(s.work.labels[0].t, Rational::new(-1, 3).unwrap());
    s.apply(Action::DeleteSelected);
    assert!(s.work.labels.is_empty());
    s.apply(Action::Undo);
    assert!(s.work.labels[0].hidden);
    s.apply(Action::Undo);
    assert!(!s.work.labels[0].hidden);
    assert_eq!(s.work.labels[0].shown_text(), "CI");
    // Bad text is refused with a message and no label.
    s.apply(Action::BeginTyping(TypingPurpose::NewLabel));
    s.apply(Action::Type('x'));
    s.apply(Action::Commit);
    assert_eq!(s.work.labels.len(), 1);
    assert!(s.message.contains("not a label"));
}

#[test]
fn retarget_moves_a_label_to_its_next_reading() {
    let mut s = state();
    // Only three close points: the fit is loose and several t fit.
    s.apply(Action::ToggleSnap);
    pick_ridge(&mut s, 6.0, &[7.0, 7.6, 8.2]);
    s.apply(Action::DenominatorBy(3));
    assert!(s.readings.len() >= 2, "{} readings", s.readings.len());
    s.apply(Action::Accept);
    let first = (s.work.labels[0].t, s.work.labels[0].s);
    s.apply(Action::Retarget);
    let l = &s.work.labels[0];
    let want = &l.evidence.readings[1].candidate;
    assert_eq!((l.t, l.s), (want.t, want.s));
    assert_ne!((l.t, l.s), first);
}

#[test]
fn channel_palette_scale_and_contrast_cycle() {
    let mut s = state();
    assert_eq!(s.channels().len(), 6);
    s.apply(Action::CycleChannel(1));
    assert_eq!(s.channel, ChannelChoice::Rxy);
    s.apply(Action::CycleChannel(-2));
    assert_eq!(s.channel, ChannelChoice::DsxyDn);
    s.apply(Action::CyclePalette(-1));
    assert_eq!(s.palette, fanmark_core::palette::builtin().len() - 1);
    s.apply(Action::CycleScale);
    assert_eq!(s.scale, ScaleKind::Log);
    s.apply(Action::Contrast(100.0));
    assert_eq!(s.clip_pct, 20.0);
}

#[test]
fn overlay_toggles_bound_the_lines_shown() {
    let mut s = state();
    let ints = s.shown_lines().len();
    assert!(ints > 0);
    assert!(s
        .shown_lines()
        .iter()
        .all(|l| l.family == fanmark_core::line::Family::Integer));
    s.apply(Action::ToggleFamily(
        fanmark_core::line::Family::CompositeFermion,
    ));
    let with_cf = s.shown_lines().len();
    assert!(with_cf > ints);
    s.apply(Action::DenominatorBy(-5));
    assert_eq!(s.overlays.den_max, 1);
    assert!(s
        .shown_lines()
        .iter()
        .all(|l| l.ts().unwrap().0.denom() == 1));
}

#[test]
fn readout_reports_filling_and_the_line_under_the_pointer() {
    let mut s = state();
    let b = 5.0;
    let (x, y) = s.physical_to_px(10.0 * E_OVER_H * b, b).unwrap();
    s.apply(Action::Pointer(x + 1.0, y));
    let r = s.readout().unwrap();
    assert!((r.nu - 10.0).abs() < 0.2, "ν = {}", r.nu);
    assert!(close(r.b_t, b, 1e-3));
    assert!(close(r.gate_v * ALPHA, r.n_m2, 1e-9));
    assert!(r.value.unwrap() < 300.0, "R_xx is small on the ν = 10 dip");
    assert_eq!(r.lines[0].0, Rational::integer(10));
}

#[test]
fn resize_keeps_the_plot_proportional_and_records_scale() {
    let mut s = state();
    s.apply(Action::Resize {
        width: 2560,
        height: 1600,
        scale: 2.0,
    });
    assert_eq!(s.window, (2560, 1600));
    assert_eq!(s.dpi_scale, 2.0);
    assert!(close(s.plot.x1, 2200.0, 1e-12));
}

#[test]
fn every_key_binding_is_unique_and_typing_captures_keys() {
    let b = bindings();
    for (i, x) in b.iter().enumerate() {
        for y in &b[i + 1..] {
            assert!(
                !(x.key == y.key && x.ctrl == y.ctrl),
                "{:?} bound twice",
                x.key
            );
        }
    }
    assert_eq!(
        action_for(Key::Char('f'), false, &Mode::Normal),
        Some(Action::CycleFrame(1))
    );
    assert_eq!(
        action_for(Key::Char('z'), true, &Mode::Normal),
        Some(Action::Undo)
    );
    assert_eq!(action_for(Key::Char('z'), false, &Mode::Normal), None);
    let typing = Mode::Typing {
        purpose: TypingPurpose::NewLabel,
        text: String::new(),
    };
    assert_eq!(
        action_for(Key::Char('f'), false, &typing),
        Some(Action::Type('f'))
    );
    assert_eq!(action_for(Key::Enter, false, &typing), Some(Action::Commit));
    assert_eq!(
        action_for(Key::Escape, false, &Mode::Help),
        Some(Action::ToggleHelp)
    );
}

#[test]
fn quit_asks_to_save_first() {
    let mut s = state();
    assert_eq!(s.apply(Action::Quit), vec![Effect::Save, Effect::Quit]);
}

/// A state on its own copy of the test fan whose data "file" is `dir/fan.csv`.
fn state_with_file(dir: &std::path::Path) -> ViewState {
    let bytes = b"a stand-in for the measured file\n";
    let path = dir.join("fan.csv");
    std::fs::write(&path, bytes).unwrap();
    let mut o = BuildOptions::new(Stack::Monolayer);
    o.index = false;
    o.fallback_gate = SingleGate {
        alpha_m2_per_v: ALPHA,
        v_cnp: 0.0,
    };
    let vd = ViewData::build(
        fan_map(321, 86),
        Some(path),
        super::data::fnv1a_hex(bytes),
        &o,
    )
    .unwrap();
    let mut s = ViewState::new(Arc::new(vd));
    s.apply(Action::PlotArea(PlotArea {
        x0: 100.0,
        y0: 50.0,
        x1: 1100.0,
        y1: 750.0,
    }));
    s
}

#[test]
fn project_round_trip_restores_every_kept_field() {
    use super::project;
    let dir = tempfile::tempdir().unwrap();
    let mut s = state_with_file(dir.path());
    // Two labels: one accepted from a ridge (with fit, readings and Hall checks), one typed,
    // renamed and hidden; then a third typed one that stays selected.
    s.apply(Action::ToggleSnap);
    pick_ridge(&mut s, 6.0, &[3.0, 4.5, 6.0, 7.5, 8.5]);
    s.apply(Action::CandidateBy(1));
    s.apply(Action::Accept);
    for text in ["-2 0", "10"] {
        s.apply(Action::BeginTyping(TypingPurpose::NewLabel));
        for c in text.chars() {
            s.apply(Action::Type(c));
        }
        s.apply(Action::Commit);
    }
    s.apply(Action::SelectBy(-1));
    s.apply(Action::SelectBy(-1));
    s.apply(Action::BeginTyping(TypingPurpose::Rename));
    for c in "hole side".chars() {
        s.apply(Action::Type(c));
    }
    s.apply(Action::Commit);
    s.apply(Action::ToggleHidden);
    s.apply(Action::SelectBy(1));
    // Every view and overlay setting away from its default.
    s.apply(Action::Pointer(420.0, 310.0));
    s.apply(Action::ZoomAt(420.0, 310.0, 1.7));
    s.apply(Action::SetFrame(FrameKind::DensityField));
    s.apply(Action::CycleChannel(1));
    s.apply(Action::CyclePalette(2));
    s.apply(Action::CycleScale);
    s.apply(Action::Contrast(1.5));
    s.apply(Action::ToggleFamily(
        fanmark_core::line::Family::BrokenSymmetry,
    ));
    s.apply(Action::DenominatorBy(2));
    s.apply(Action::ToggleStates);
    s.apply(Action::ToggleHighlight);
    s.apply(Action::CycleCut);
    assert_eq!(s.work.labels.len(), 3);
    assert!(!s.work.labels[0].evidence.readings.is_empty());
    assert_eq!(
        s.work.labels[0].reading, 1,
        "the second reading was accepted"
    );

    let path = dir.path().join("fan.view.json");
    let p = project::from_state(&s, &path);
    project::save(&path, &p).unwrap();
    // Saving again replaces the file and leaves no temporary file beside it.
    project::save(&path, &p).unwrap();
    let names: Vec<String> = std::fs::read_dir(dir.path())
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().to_string())
        .collect();
    assert_eq!(names.len(), 2, "only the data and the project: {names:?}");

    let q = project::load(&path).unwrap();
    assert_eq!(q, p, "the file holds exactly what was saved");
    assert_eq!(q.data_file, Some(std::path::PathBuf::from("fan.csv")));
    assert_eq!(
        std::fs::canonicalize(project::data_path(&q, &path).unwrap()).unwrap(),
        std::fs::canonicalize(s.data.source.as_ref().unwrap()).unwrap()
    );
    assert_eq!(q.data_checksum, s.data.checksum);
    assert_eq!(q.calibration.alpha_m2_per_v, ALPHA);

    let mut r = ViewState::new(s.data.clone());
    project::restore(&q, &mut r);
    assert_eq!(r.frame, FrameKind::DensityField);
    assert_eq!(r.channel, ChannelChoice::Rxy);
    assert_eq!(r.palette, s.palette);
    assert_eq!(r.scale, ScaleKind::Log);
    assert_eq!(r.clip_pct, 2.5);
    assert_eq!(r.view, s.view);
    assert_eq!(r.cut, CutKind::Row);
    assert!(!r.snap);
    assert_eq!(r.overlays, s.overlays);
    assert_eq!(r.overlays.den_max, 5);
    assert_eq!(r.work.labels, s.work.labels);
    assert_eq!(r.work.next_id, 3);
    assert_eq!(r.work.selected, s.work.selected);
    assert_eq!(r.selected().unwrap().t, Rational::integer(-2));
    let hidden = r.work.labels.iter().find(|l| l.hidden).unwrap();
    assert_eq!(hidden.shown_text(), "hole side");
    // History does not travel with the file: a fresh session starts with nothing to undo.
    assert!(r.undo.is_empty() && r.redo.is_empty());
    // A new label after reopening gets a fresh id.
    r.apply(Action::BeginTyping(TypingPurpose::NewLabel));
    r.apply(Action::Type('4'));
    r.apply(Action::Commit);
    assert_eq!(r.work.labels.last().unwrap().id, 3);
}

#[test]
fn project_load_names_the_file_and_what_is_wrong() {
    use super::project;
    let dir = tempfile::tempdir().unwrap();
    let path = dir.path().join("bad.view.json");
    std::fs::write(
        &path,
        "{\n  \"format\": \"fanmark-view-project\",\n  \"version\": 1,\n  oops\n}\n",
    )
    .unwrap();
    let e = project::load(&path).unwrap_err().to_string();
    assert!(e.contains("bad.view.json") && e.contains("line 4"), "{e}");
    std::fs::write(&path, "{\"format\": \"something else\", \"version\": 1}").unwrap();
    let e = project::load(&path).unwrap_err().to_string();
    assert!(e.contains("field `format`"), "{e}");
    std::fs::write(
        &path,
        "{\"format\": \"fanmark-view-project\", \"version\": 99}",
    )
    .unwrap();
    let e = project::load(&path).unwrap_err().to_string();
    assert!(e.contains("field `version`") && e.contains("99"), "{e}");
    // A truncated file (what a torn write would leave) is refused, not half-read.
    let s = state_with_file(dir.path());
    let good = serde_json::to_string_pretty(&project::from_state(&s, &path)).unwrap();
    std::fs::write(&path, &good[..good.len() / 2]).unwrap();
    assert!(project::load(&path).is_err());
}

#[test]
fn sampled_view_equals_interpolating_the_map_at_each_sample() {
    // Zoomed in far enough that the finest level is used: every sample must be the bilinear
    // value of the map at that sample's (gate, field), in each frame.
    for k in [
        FrameKind::GateField,
        FrameKind::DensityField,
        FrameKind::FillingField,
    ] {
        let mut s = state();
        s.apply(Action::SetFrame(k));
        s.apply(Action::ZoomAt(600.0, 400.0, 4.0));
        let (vals, xs, ys) = super::heat::sample_view(&s, 60, 40);
        let frame = s.core_frame();
        let mut compared = 0;
        for (r, &y) in ys.iter().enumerate() {
            for (c, &x) in xs.iter().enumerate() {
                let (n, b) = frame
                    .from_frame(fanmark_core::line::FramePoint { x, y })
                    .unwrap();
                let want = s
                    .data
                    .value_at(ChannelChoice::Rxx, s.data.gate.gate_for_density(n), b);
                match want {
                    Some(w) => {
                        assert!(close(vals[[r, c]], w, 1e-9), "{k:?} ({c}, {r})");
                        compared += 1;
                    }
                    None => assert!(!vals[[r, c]].is_finite(), "{k:?} ({c}, {r}) outside"),
                }
            }
        }
        assert!(compared > 1000, "{k:?}: {compared}");
    }
}

#[test]
fn cached_layer_frames_equal_a_direct_render_of_the_same_state() {
    use super::draw::{render_direct, Renderer, Reuse};
    use super::state::TypingPurpose;
    use fanmark_core::line::Family;
    let mut s = state();
    s.apply(Action::ToggleFamily(Family::BrokenSymmetry));
    s.apply(Action::BeginTyping(TypingPurpose::NewLabel));
    for c in "-2 0".chars() {
        s.apply(Action::Type(c));
    }
    s.apply(Action::Commit);
    let (w, h) = (640, 420);
    let mut r = Renderer::default();
    r.render_settled(&mut s, w, h, 1.0).unwrap();
    // The largest channel difference and the share of pixels differing by more than a level.
    let compare = |a: &tiny_skia::Pixmap, b: &tiny_skia::Pixmap| {
        let (mut worst, mut differ) = (0u8, 0usize);
        for (p, q) in a.data().chunks(4).zip(b.data().chunks(4)) {
            let d = (0..4).map(|k| p[k].abs_diff(q[k])).max().unwrap_or(0);
            worst = worst.max(d);
            differ += (d > 1) as usize;
        }
        (worst, differ as f64 / (a.width() * a.height()) as f64)
    };
    let mid = |s: &ViewState| (0.5 * (s.plot.x0 + s.plot.x1), 0.5 * (s.plot.y0 + s.plot.y1));
    type Step<'a> = Box<dyn Fn(&mut ViewState) + 'a>;
    let steps: Vec<Step> = vec![
        Box::new(|s| {
            let (x, y) = mid(s);
            s.apply(Action::Pointer(x + 13.0, y - 7.0));
        }),
        Box::new(|s| {
            let (x, y) = mid(s);
            s.apply(Action::Pointer(x - 40.0, y + 20.0));
        }),
        Box::new(|s| {
            s.apply(Action::PanBy(11.0, -5.0));
        }),
        Box::new(|s| {
            s.apply(Action::Zoom(1.3));
        }),
        Box::new(|s| {
            s.apply(Action::ToggleFamily(Family::BrokenSymmetry));
        }),
    ];
    let before = r.overlays_made;
    for (k, step) in steps.iter().enumerate() {
        step(&mut s);
        let cached = r.render(&s, w, h).unwrap();
        let direct = render_direct(&s, w, h).unwrap();
        assert_eq!(cached.plot, direct.plot, "step {k}");
        let (worst, share) = compare(&cached.pixmap, &direct.pixmap);
        // Compositing rounds by at most a level a blend; strokes are drawn analytically, the
        // same in the layer's bands as in one pass (measured: worst 2, 3 pixels in 268 800).
        assert!(
            worst <= 3 && share < 0.0002,
            "step {k}: {worst} levels, {share}"
        );
    }
    // The two pointer moves reused the overlay; the pan, zoom and toggle redrew it.
    assert_eq!(r.overlays_made - before, 3);
    // An interim frame of a drag: the cached picture moved by whole pixels.
    let (x, y) = mid(&s);
    let settled = r.render(&s, w, h).unwrap();
    s.apply(Action::PanBy(6.0, 0.0));
    let moved = r.render_with(&s, w, h, Reuse::Interim).unwrap();
    let px = |p: &tiny_skia::Pixmap, x: f64, y: f64| p.pixel(x as u32, y as u32).unwrap();
    for dy in [-30.0, 0.0, 25.0] {
        for dx in [-50.0, 0.0, 60.0] {
            assert_eq!(
                px(&settled.pixmap, x + dx, y + dy),
                px(&moved.pixmap, x + dx + 6.0, y + dy)
            );
        }
    }
}

#[test]
fn held_keys_repeat_commands_but_never_type_twice() {
    use super::keys::repeat_allowed;
    use super::state::{Mode, TypingPurpose};
    let normal = Mode::Normal;
    let typing = Mode::Typing {
        purpose: TypingPurpose::Rename,
        text: String::new(),
    };
    let zoom = Action::ZoomAt(10.0, 10.0, 1.2);
    assert!(repeat_allowed(&zoom, &normal));
    assert!(!repeat_allowed(
        &Action::BeginTyping(TypingPurpose::Rename),
        &normal
    ));
    assert!(!repeat_allowed(&zoom, &typing));
}

#[test]
fn wheel_zoom_interim_frames_scale_the_settled_picture_about_the_cursor() {
    use super::draw::{Renderer, Reuse};
    let mut s = state();
    let (w, h) = (640, 420);
    let mut r = Renderer::default();
    let settled = r.render_settled(&mut s, w, h, 1.0).unwrap();
    let p = settled.plot.unwrap();
    let made = (r.layers_made, r.overlays_made);
    let px = |pm: &tiny_skia::Pixmap, x: i64, y: i64| pm.pixel(x as u32, y as u32).unwrap();
    // Inside the plot, clear of the frame drawn on its edge.
    let inner =
        |x: f64, y: f64| x >= p.x0 + 3.0 && x < p.x1 - 3.0 && y >= p.y0 + 3.0 && y < p.y1 - 3.0;
    let (cx, cy) = (p.x0 + 0.37 * (p.x1 - p.x0), p.y0 + 0.61 * (p.y1 - p.y0));
    // Two quick notches in, then one out: each interim frame scales the settled picture by the
    // zoom so far, about the cursor: window pixel q shows what the settled frame had at
    // cursor + (q − cursor)/zoom.
    let mut zoom = 1.0;
    for f in [1.2, 1.2, 1.0 / 1.2 / 1.2 / 1.5] {
        s.apply(Action::ZoomAt(cx, cy, f));
        zoom *= f;
        let interim = r.render_with(&s, w, h, Reuse::Interim).unwrap();
        assert_eq!(
            (r.layers_made, r.overlays_made),
            made,
            "nothing drawn afresh"
        );
        let (mut same, mut missing) = (0, 0);
        for y in (p.y0 as i64..p.y1 as i64).step_by(7) {
            for x in (p.x0 as i64..p.x1 as i64).step_by(5) {
                let (qx, qy) = (x as f64 + 0.5, y as f64 + 0.5);
                if !inner(qx, qy) {
                    continue;
                }
                let (sx, sy) = (cx + (qx - cx) / zoom, cy + (qy - cy) / zoom);
                // Skip sources within rounding of a pixel edge (either neighbour is right).
                let edge = |v: f64| (v - v.round()).abs() < 1e-6;
                if edge(sx) || edge(sy) {
                    continue;
                }
                let got = px(&interim.pixmap, x, y);
                if inner(sx, sy) {
                    assert_eq!(got, px(&settled.pixmap, sx as i64, sy as i64), "({x}, {y})");
                    same += 1;
                } else if !(sx >= p.x0 && sx < p.x1 && sy >= p.y0 && sy < p.y1) {
                    // Zoomed out past what the settled frame showed: the missing-data colour.
                    assert_eq!(
                        (got.red(), got.green(), got.blue()),
                        (40, 40, 40),
                        "({x}, {y})"
                    );
                    missing += 1;
                }
            }
        }
        assert!(same > 500, "zoom {zoom}: {same} pixels compared");
        assert_eq!(missing > 0, zoom < 1.0, "zoom {zoom}: {missing} missing");
        // The axes outside the plot stay as they were until the wheel pauses.
        assert_eq!(px(&interim.pixmap, 2, 2), px(&settled.pixmap, 2, 2));
        let below = (p.y1 as i64 + 12).min(h as i64 - 30);
        for x in (0..w as i64).step_by(3) {
            assert_eq!(px(&interim.pixmap, x, below), px(&settled.pixmap, x, below));
        }
    }
    // The pause: a settled frame samples and draws the new view (with its new ticks, which
    // may move the plot).
    r.render_settled(&mut s, w, h, 1.0).unwrap();
    assert!(r.layers_made > made.0);
}

#[test]
fn a_kept_heat_map_layer_gives_the_fresh_frame_and_a_new_palette_redraws_it() {
    use super::draw::Renderer;
    let mut s = state();
    s.apply(Action::CycleCut);
    let (w, h) = (640, 420);
    let mut r = Renderer::default();
    let mid = |s: &ViewState| (0.5 * (s.plot.x0 + s.plot.x1), 0.5 * (s.plot.y0 + s.plot.y1));
    r.render_settled(&mut s, w, h, 1.0).unwrap();
    let (x, y) = mid(&s);
    s.apply(Action::Pointer(x, y));
    r.render_settled(&mut s, w, h, 1.0).unwrap();
    let made = r.layers_made;
    // A pointer move changes the row cut, so the base is drawn again; the heat map is not.
    let cut = super::draw::cut_of(&s);
    s.apply(Action::Pointer(x + 5.0, y + 30.0));
    assert!(
        cut.is_some() && super::draw::cut_of(&s) != cut,
        "the cut moved"
    );
    let kept = r.render(&s, w, h).unwrap();
    assert_eq!(r.layers_made, made, "the kept layer was used");
    let fresh = Renderer::default().render(&s, w, h).unwrap();
    assert!(
        kept.pixmap.data() == fresh.pixmap.data(),
        "kept layer frame = fresh frame"
    );
    // Another palette is another key: the layer is made again, and equals a fresh one.
    s.apply(Action::CyclePalette(1));
    let next = r.render(&s, w, h).unwrap();
    assert_eq!(r.layers_made, made + 1);
    let fresh = Renderer::default().render(&s, w, h).unwrap();
    assert!(next.pixmap.data() == fresh.pixmap.data());
    assert!(
        next.pixmap.data() != kept.pixmap.data(),
        "the palette shows"
    );
}

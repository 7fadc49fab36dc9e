//! Window glue: winit events become [`Action`]s, the state is drawn by [`Renderer`] and shown
//! with softbuffer; the effects the reducer asks for (save, export, quit) are carried out here,
//! and the project is autosaved a moment after each change and on close.

use super::draw::{cut_csv, cut_of, export_figure, Renderer};
use super::interim::{Motion, Settle};
use super::keys::{action_for, repeat_allowed, Key};
use super::project;
use super::state::{Action, Button, Drag, Effect, ViewState};
use crate::figure::{self, Format};
use anyhow::{anyhow, Context as _};
use rayon::prelude::*;
use std::io::Write as _;
use std::num::NonZeroU32;
use std::path::PathBuf;
use std::rc::Rc;
use std::time::{Duration, Instant};
use winit::application::ApplicationHandler;
use winit::dpi::LogicalSize;
use winit::event::{ElementState, MouseButton, MouseScrollDelta, WindowEvent};
use winit::event_loop::{ActiveEventLoop, ControlFlow, EventLoop};
use winit::keyboard::{Key as WKey, ModifiersState, NamedKey};
use winit::window::{Window, WindowId};

/// Delay between the last change and the autosave.
pub const AUTOSAVE_DELAY: Duration = Duration::from_millis(400);

/// Where the viewer writes its files.
#[derive(Clone, Debug)]
pub struct Outputs {
    /// Project file.
    pub project: PathBuf,
    /// Stem for exports (`<stem>.png`, `.svg`, `.pdf`, `-labels.csv`, `-cut.csv` …).
    pub export_stem: PathBuf,
}

struct Shown {
    window: Rc<Window>,
    surface: softbuffer::Surface<Rc<Window>, Rc<Window>>,
}

struct App {
    state: ViewState,
    renderer: Renderer,
    out: Outputs,
    shown: Option<Shown>,
    mods: ModifiersState,
    saved_revision: u64,
    changed_at: Option<Instant>,
    presented: bool,
    error: Option<anyhow::Error>,
    /// While a pan drag moves or the wheel zooms: when to draw the settled frame.
    settle: Settle,
}

fn key_of(k: &WKey) -> Option<Key> {
    Some(match k {
        WKey::Character(s) => Key::Char(s.chars().next()?),
        WKey::Named(n) => match n {
            NamedKey::Enter => Key::Enter,
            NamedKey::Escape => Key::Escape,
            NamedKey::Backspace => Key::Backspace,
            NamedKey::Delete => Key::Delete,
            NamedKey::Tab => Key::Tab,
            NamedKey::ArrowLeft => Key::Left,
            NamedKey::ArrowRight => Key::Right,
            NamedKey::ArrowUp => Key::Up,
            NamedKey::ArrowDown => Key::Down,
            NamedKey::Home => Key::Home,
            NamedKey::F1 => Key::F1,
            NamedKey::Space => Key::Char(' '),
            _ => return None,
        },
        _ => return None,
    })
}

impl App {
    fn dispatch(&mut self, a: Action, el: &ActiveEventLoop) {
        let rev = self.state.revision;
        let fx = self.state.apply(a);
        if self.state.revision != rev {
            self.changed_at = Some(Instant::now());
        }
        for e in fx {
            if let Err(err) = self.effect(e, el) {
                self.state.message = format!("{err:#}");
                eprintln!("fanmark view: {err:#}");
            }
        }
        if let Some(s) = &self.shown {
            s.window.request_redraw();
        }
    }

    fn save(&mut self) -> anyhow::Result<()> {
        let p = project::from_state(&self.state, &self.out.project);
        project::save(&self.out.project, &p)?;
        self.saved_revision = self.state.revision;
        self.changed_at = None;
        println!("saved {}", self.out.project.display());
        let _ = std::io::stdout().flush();
        Ok(())
    }

    fn effect(&mut self, e: Effect, el: &ActiveEventLoop) -> anyhow::Result<()> {
        let stem = self.out.export_stem.clone();
        let with = |ext: &str| PathBuf::from(format!("{}{ext}", stem.display()));
        match e {
            Effect::Save => {
                self.save()?;
                self.state.message = format!("saved {}", self.out.project.display());
            }
            Effect::ExportView => {
                let fig = export_figure(&self.state);
                for (f, ext) in [
                    (Format::Png, ".png"),
                    (Format::Svg, ".svg"),
                    (Format::Pdf, ".pdf"),
                ] {
                    figure::write(&fig, f, &with(ext))?;
                }
                self.state.message = format!("exported {}.png/.svg/.pdf", stem.display());
                println!("{}", self.state.message);
            }
            Effect::ExportLabels => {
                let (csv, json) = super::export::labels_files(&self.state)?;
                fanmark_core::io::write::write_atomic(&with("-labels.csv"), csv.as_bytes())?;
                fanmark_core::io::write::write_atomic(&with("-labels.json"), json.as_bytes())?;
                self.state.message = format!("exported {}-labels.csv/.json", stem.display());
                println!("{}", self.state.message);
            }
            Effect::ExportCut => match cut_of(&self.state) {
                Some(c) => {
                    fanmark_core::io::write::write_atomic(
                        &with("-cut.csv"),
                        cut_csv(&c).as_bytes(),
                    )?;
                    self.state.message = format!("exported {}-cut.csv", stem.display());
                    println!("{}", self.state.message);
                }
                None => self.state.message = "no line cut: press x and point at the map".into(),
            },
            Effect::Quit => el.exit(),
        }
        Ok(())
    }

    fn redraw(&mut self) -> anyhow::Result<()> {
        let Some(shown) = self.shown.as_mut() else {
            return Ok(());
        };
        let size = shown.window.inner_size();
        let (w, h) = (size.width.max(1), size.height.max(1));
        if (w, h) != self.state.window {
            self.state.apply(Action::Resize {
                width: w,
                height: h,
                scale: shown.window.scale_factor(),
            });
        }
        let panning = matches!(self.state.drag, Some(Drag::Pan { moved: true, .. }));
        let reuse = self.settle.reuse(Instant::now(), panning);
        let r = self.renderer.render_with(&self.state, w, h, reuse)?;
        if let Some(p) = r.plot {
            if p != self.state.plot {
                // The layout moved the plot (new tick labels): use it and draw again.
                self.state.apply(Action::PlotArea(p));
                shown.window.request_redraw();
            }
        }
        shown
            .surface
            .resize(
                NonZeroU32::new(w).unwrap_or(NonZeroU32::MIN),
                NonZeroU32::new(h).unwrap_or(NonZeroU32::MIN),
            )
            .map_err(|e| anyhow!("resizing the window buffer: {e}"))?;
        let mut buf = shown
            .surface
            .buffer_mut()
            .map_err(|e| anyhow!("window buffer: {e}"))?;
        to_softbuffer(r.pixmap.data(), &mut buf);
        buf.present().map_err(|e| anyhow!("presenting: {e}"))?;
        if !self.presented {
            self.presented = true;
            println!("fanmark view: first frame presented ({w}×{h})");
            let _ = std::io::stdout().flush();
        }
        Ok(())
    }
}

/// Pixels the window buffer converts per parallel task.
const CONVERT_CHUNK: usize = 64 * 1024;

/// Convert opaque RGBA bytes to softbuffer's 0RGB words, in parallel chunks; words past the end
/// of `rgba` are left as they are.
fn to_softbuffer(rgba: &[u8], out: &mut [u32]) {
    out.par_chunks_mut(CONVERT_CHUNK)
        .zip(rgba.par_chunks(CONVERT_CHUNK * 4))
        .for_each(|(o, d)| {
            for (px, c) in o.iter_mut().zip(d.chunks_exact(4)) {
                *px = (c[0] as u32) << 16 | (c[1] as u32) << 8 | c[2] as u32;
            }
        });
}

impl ApplicationHandler for App {
    fn resumed(&mut self, el: &ActiveEventLoop) {
        if self.shown.is_some() {
            return;
        }
        let name = self
            .state
            .data
            .source
            .as_ref()
            .map_or("demo device".to_string(), |p| p.display().to_string());
        let attrs = Window::default_attributes()
            .with_title(format!("fanmark view — {name}"))
            .with_inner_size(LogicalSize::new(1280.0, 800.0));
        let made = el
            .create_window(attrs)
            .map_err(|e| anyhow!("cannot open a window: {e}"))
            .and_then(|w| {
                let w = Rc::new(w);
                let ctx = softbuffer::Context::new(w.clone())
                    .map_err(|e| anyhow!("cannot use the display for drawing: {e}"))?;
                let surface = softbuffer::Surface::new(&ctx, w.clone())
                    .map_err(|e| anyhow!("cannot create the window surface: {e}"))?;
                Ok(Shown { window: w, surface })
            });
        match made {
            Ok(s) => {
                let size = s.window.inner_size();
                self.state.apply(Action::Resize {
                    width: size.width.max(1),
                    height: size.height.max(1),
                    scale: s.window.scale_factor(),
                });
                s.window.request_redraw();
                self.shown = Some(s);
            }
            Err(e) => {
                self.error = Some(e);
                el.exit();
            }
        }
    }

    fn window_event(&mut self, el: &ActiveEventLoop, _id: WindowId, event: WindowEvent) {
        match event {
            WindowEvent::CloseRequested => {
                if let Err(e) = self.save() {
                    eprintln!("fanmark view: saving on close: {e:#}");
                }
                el.exit();
            }
            WindowEvent::RedrawRequested => {
                if let Err(e) = self.redraw() {
                    self.error = Some(e);
                    el.exit();
                }
            }
            WindowEvent::Resized(size) => {
                let scale = self.shown.as_ref().map_or(1.0, |s| s.window.scale_factor());
                self.dispatch(
                    Action::Resize {
                        width: size.width.max(1),
                        height: size.height.max(1),
                        scale,
                    },
                    el,
                );
            }
            WindowEvent::ScaleFactorChanged { scale_factor, .. } => {
                let (w, h) = self.state.window;
                self.dispatch(
                    Action::Resize {
                        width: w,
                        height: h,
                        scale: scale_factor,
                    },
                    el,
                );
            }
            WindowEvent::ModifiersChanged(m) => self.mods = m.state(),
            WindowEvent::CursorMoved { position, .. } => {
                self.dispatch(Action::Pointer(position.x, position.y), el);
                if matches!(self.state.drag, Some(Drag::Pan { moved: true, .. })) {
                    self.settle.moved(Motion::Pan, Instant::now());
                }
            }
            WindowEvent::CursorLeft { .. } => self.dispatch(Action::PointerLeft, el),
            WindowEvent::MouseInput { state, button, .. } => {
                let b = match button {
                    MouseButton::Left => Button::Left,
                    MouseButton::Right => Button::Right,
                    _ => return,
                };
                let a = match state {
                    ElementState::Pressed => Action::Press(b, self.mods.shift_key()),
                    ElementState::Released => Action::Release(b),
                };
                self.dispatch(a, el);
            }
            WindowEvent::MouseWheel { delta, .. } => {
                let lines = match delta {
                    MouseScrollDelta::LineDelta(_, y) => y as f64,
                    MouseScrollDelta::PixelDelta(p) => p.y / 40.0,
                };
                if let Some((x, y)) = self.state.pointer {
                    // Quick notches show the last picture scaled until the wheel pauses.
                    self.settle.moved(Motion::Steps, Instant::now());
                    self.dispatch(Action::ZoomAt(x, y, 1.2f64.powf(lines)), el);
                }
            }
            WindowEvent::KeyboardInput { event, .. } => {
                if event.state != ElementState::Pressed {
                    return;
                }
                let Some(k) = key_of(&event.logical_key) else {
                    return;
                };
                if let Some(a) = action_for(k, self.mods.control_key(), &self.state.mode) {
                    if event.repeat && !repeat_allowed(&a, &self.state.mode) {
                        return;
                    }
                    // A held zoom or pan key: interim frames until it is let go.
                    if event.repeat && matches!(a, Action::Zoom(_) | Action::PanBy(..)) {
                        self.settle.moved(Motion::Steps, Instant::now());
                    }
                    self.dispatch(a, el);
                }
            }
            _ => {}
        }
    }

    fn about_to_wait(&mut self, el: &ActiveEventLoop) {
        if let Some(t) = self.changed_at {
            if self.state.revision != self.saved_revision && t.elapsed() >= AUTOSAVE_DELAY {
                if let Err(e) = self.save() {
                    self.state.message = format!("autosave failed: {e:#}");
                    eprintln!("fanmark view: autosave: {e:#}");
                    self.changed_at = None;
                }
            }
        }
        if self.settle.settle_now(Instant::now()) {
            if let Some(s) = &self.shown {
                s.window.request_redraw();
            }
        }
        let wake = [
            self.changed_at.map(|t| t + AUTOSAVE_DELAY),
            self.settle.due(),
        ]
        .into_iter()
        .flatten()
        .min();
        match wake {
            Some(t) => el.set_control_flow(ControlFlow::WaitUntil(t)),
            None => el.set_control_flow(ControlFlow::Wait),
        }
    }
}

/// Open the window on `state` and run until it is closed.
pub fn run(state: ViewState, out: Outputs) -> anyhow::Result<()> {
    if std::env::var_os("DISPLAY").is_none() && std::env::var_os("WAYLAND_DISPLAY").is_none() {
        return Err(anyhow!(
            "no display: set DISPLAY (X11) or WAYLAND_DISPLAY, or run under Xvfb"
        ));
    }
    // winit panics inside EventLoop::new when libxkbcommon-x11 is missing: turn that into an error.
    let prev = std::panic::take_hook();
    std::panic::set_hook(Box::new(|_| {}));
    let el = std::panic::catch_unwind(EventLoop::new);
    std::panic::set_hook(prev);
    let el = match el {
        Ok(r) => r.context("cannot connect to the display")?,
        Err(p) => {
            let msg = p
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default();
            return Err(anyhow!(
                "the windowing system failed to start ({msg}); is libxkbcommon-x11 installed?"
            ));
        }
    };
    let saved_revision = state.revision;
    let mut app = App {
        state,
        renderer: Renderer::default(),
        out,
        shown: None,
        mods: ModifiersState::empty(),
        saved_revision,
        changed_at: None,
        presented: false,
        error: None,
        settle: Settle::default(),
    };
    el.run_app(&mut app).context("running the window")?;
    match app.error {
        Some(e) => Err(e),
        None => Ok(()),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn window_words_are_0rgb_of_each_pixel_across_chunks() {
        // More pixels than one chunk, so that the chunks' seams are crossed.
        let n = CONVERT_CHUNK + 37;
        let rgba: Vec<u8> = (0..n)
            .flat_map(|i| [(i % 251) as u8, (i % 13) as u8, (i % 7) as u8, 255])
            .collect();
        let mut out = vec![0xdead_beef_u32; n + 3];
        to_softbuffer(&rgba, &mut out);
        for (i, &word) in out[..n].iter().enumerate() {
            let want = ((i % 251) as u32) << 16 | ((i % 13) as u32) << 8 | (i % 7) as u32;
            assert_eq!(word, want, "pixel {i}");
        }
        assert!(out[n..].iter().all(|&w| w == 0xdead_beef));
    }
}

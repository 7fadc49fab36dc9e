//! The key map: one table of bindings, used both to turn key presses into actions and to draw
//! the help overlay, so the two can never disagree.

use super::state::{Action, Mode, TypingPurpose};
use fanmark_core::line::Family;

/// A key, independent of the windowing library.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Key {
    /// A printable character as typed (already shifted, e.g. `?` or `F`).
    Char(char),
    /// Enter / Return.
    Enter,
    /// Escape.
    Escape,
    /// Backspace.
    Backspace,
    /// Delete.
    Delete,
    /// Tab.
    Tab,
    /// Arrow left.
    Left,
    /// Arrow right.
    Right,
    /// Arrow up.
    Up,
    /// Arrow down.
    Down,
    /// Home.
    Home,
    /// Function key F1.
    F1,
}

/// One binding: a key (with or without Ctrl), the action and its help text.
#[derive(Clone, Debug)]
pub struct Binding {
    /// The key.
    pub key: Key,
    /// Ctrl must be held.
    pub ctrl: bool,
    /// What it does.
    pub action: Action,
    /// Group heading in the help overlay.
    pub group: &'static str,
    /// Help text.
    pub help: &'static str,
}

fn b(key: Key, ctrl: bool, action: Action, group: &'static str, help: &'static str) -> Binding {
    Binding {
        key,
        ctrl,
        action,
        group,
        help,
    }
}

/// Every key binding of the viewer, in help order.
pub fn bindings() -> Vec<Binding> {
    use Action as A;
    use Key::*;
    let c = Char;
    vec![
        b(Left, false, A::PanBy(60.0, 0.0), "view", "pan left"),
        b(Right, false, A::PanBy(-60.0, 0.0), "view", "pan right"),
        b(Up, false, A::PanBy(0.0, 60.0), "view", "pan up"),
        b(Down, false, A::PanBy(0.0, -60.0), "view", "pan down"),
        b(
            c('='),
            false,
            A::Zoom(1.25),
            "view",
            "zoom in at the pointer",
        ),
        b(
            c('+'),
            false,
            A::Zoom(1.25),
            "view",
            "zoom in at the pointer",
        ),
        b(
            c('-'),
            false,
            A::Zoom(0.8),
            "view",
            "zoom out at the pointer",
        ),
        b(Home, false, A::ResetView, "view", "show the whole map"),
        b(c('0'), false, A::ResetView, "view", "show the whole map"),
        b(
            c('f'),
            false,
            A::CycleFrame(1),
            "view",
            "next frame: (Vg,B) (n,B) (ν,B) (n/n₀,φ/φ₀)",
        ),
        b(c('F'), false, A::CycleFrame(-1), "view", "previous frame"),
        b(
            c('c'),
            false,
            A::CycleChannel(1),
            "view",
            "next channel: Rxx Rxy σxx σxy dRxx/dn dσxy/dn",
        ),
        b(
            c('C'),
            false,
            A::CycleChannel(-1),
            "view",
            "previous channel",
        ),
        b(c('p'), false, A::CyclePalette(1), "view", "next palette"),
        b(
            c('P'),
            false,
            A::CyclePalette(-1),
            "view",
            "previous palette",
        ),
        b(
            c('m'),
            false,
            A::CycleScale,
            "view",
            "colour scale: linear, log, symmetric log",
        ),
        b(
            c(']'),
            false,
            A::Contrast(0.5),
            "view",
            "more contrast (clip 0.5 % more of each tail)",
        ),
        b(c('['), false, A::Contrast(-0.5), "view", "less contrast"),
        b(
            c('1'),
            false,
            A::ToggleFamily(Family::Integer),
            "lines",
            "integer fan on/off",
        ),
        b(
            c('2'),
            false,
            A::ToggleFamily(Family::BrokenSymmetry),
            "lines",
            "broken-symmetry fan on/off",
        ),
        b(
            c('3'),
            false,
            A::ToggleFamily(Family::CompositeFermion),
            "lines",
            "fractional (composite-fermion) lines on/off",
        ),
        b(
            c('4'),
            false,
            A::ToggleFamily(Family::Satellite),
            "lines",
            "satellite fans on/off",
        ),
        b(
            c('5'),
            false,
            A::ToggleFamily(Family::Wannier),
            "lines",
            "Wannier (t, s) lines on/off",
        ),
        b(
            c('.'),
            false,
            A::DenominatorBy(1),
            "lines",
            "raise the denominator bound",
        ),
        b(
            c(','),
            false,
            A::DenominatorBy(-1),
            "lines",
            "lower the denominator bound",
        ),
        b(
            c('i'),
            false,
            A::ToggleStates,
            "lines",
            "detected states on/off",
        ),
        b(
            c('u'),
            false,
            A::ToggleHighlight,
            "lines",
            "highlight the line under the pointer on/off",
        ),
        b(
            c('s'),
            false,
            A::ToggleSnap,
            "label",
            "snap to features on/off",
        ),
        b(
            c(' '),
            false,
            A::PickHere,
            "label",
            "add the point under the pointer to the ridge",
        ),
        b(
            Backspace,
            false,
            A::DropPick,
            "label",
            "drop the last ridge point",
        ),
        b(
            Tab,
            false,
            A::CandidateBy(1),
            "label",
            "next (t, s) reading of the ridge",
        ),
        b(
            c('`'),
            false,
            A::CandidateBy(-1),
            "label",
            "previous reading",
        ),
        b(
            Enter,
            false,
            A::Accept,
            "label",
            "accept the chosen reading as a label",
        ),
        b(
            c('t'),
            false,
            A::BeginTyping(TypingPurpose::NewLabel),
            "label",
            "type a label: t s, then Enter",
        ),
        b(
            c('n'),
            false,
            A::SelectBy(1),
            "label",
            "select the next label",
        ),
        b(
            c('N'),
            false,
            A::SelectBy(-1),
            "label",
            "select the previous label",
        ),
        b(
            c('r'),
            false,
            A::BeginTyping(TypingPurpose::Rename),
            "label",
            "rename the selected label",
        ),
        b(
            c('g'),
            false,
            A::Retarget,
            "label",
            "move the selected label to its next reading",
        ),
        b(
            c('h'),
            false,
            A::ToggleHidden,
            "label",
            "hide/show the selected label",
        ),
        b(
            Delete,
            false,
            A::DeleteSelected,
            "label",
            "delete the selected label",
        ),
        b(c('z'), true, A::Undo, "label", "undo"),
        b(c('y'), true, A::Redo, "label", "redo"),
        b(c('Z'), true, A::Redo, "label", "redo"),
        b(
            c('x'),
            false,
            A::CycleCut,
            "cut",
            "line cut: row, column, along the line, off",
        ),
        b(
            c('k'),
            false,
            A::ExportCut,
            "cut",
            "write the line cut as CSV",
        ),
        b(c('w'), true, A::Save, "file", "save the project now"),
        b(
            c('e'),
            false,
            A::ExportView,
            "file",
            "export the view as PNG, SVG and PDF",
        ),
        b(
            c('l'),
            false,
            A::ExportLabels,
            "file",
            "export the labels as CSV and JSON",
        ),
        b(c('?'), false, A::ToggleHelp, "file", "this key map"),
        b(F1, false, A::ToggleHelp, "file", "this key map"),
        b(
            Escape,
            false,
            A::Cancel,
            "file",
            "close help / stop typing / clear the ridge",
        ),
        b(c('q'), true, A::Quit, "file", "save and quit"),
    ]
}

/// Pointer bindings, for the help overlay.
pub const POINTER_HELP: [(&str, &str); 5] = [
    ("left drag", "pan"),
    ("left click", "add the (snapped) point to the ridge"),
    ("shift + left drag", "collect snapped points along a ridge"),
    ("right drag", "zoom to the box"),
    ("wheel", "zoom about the pointer"),
];

/// Whether a key the operating system repeats because it is held down may act again: only
/// commands in the normal mode repeat (panning, zooming, stepping), and never one that opens
/// text entry; in text entry a repeat is dropped, so one slow key press never types twice.
pub fn repeat_allowed(action: &Action, mode: &Mode) -> bool {
    matches!(mode, Mode::Normal) && !matches!(action, Action::BeginTyping(_))
}

/// The action of a key press in `mode`, if any. While typing, printable keys are text.
pub fn action_for(key: Key, ctrl: bool, mode: &Mode) -> Option<Action> {
    if let Mode::Typing { .. } = mode {
        return match key {
            Key::Enter => Some(Action::Commit),
            Key::Escape => Some(Action::Cancel),
            Key::Backspace => Some(Action::Backspace),
            Key::Char(ch) if !ctrl => Some(Action::Type(ch)),
            _ => None,
        };
    }
    if let Mode::Help = mode {
        if matches!(key, Key::Escape | Key::Char('?') | Key::F1) {
            return Some(Action::ToggleHelp);
        }
    }
    // Ctrl + letter may arrive as the upper- or lower-case letter.
    let fold = |k: Key| match k {
        Key::Char(c) if ctrl && c.is_ascii_uppercase() && c != 'Z' => {
            Key::Char(c.to_ascii_lowercase())
        }
        k => k,
    };
    let key = fold(key);
    bindings()
        .into_iter()
        .find(|b| b.key == key && b.ctrl == ctrl)
        .map(|b| b.action)
}

/// Text of a key for the help overlay.
pub fn key_name(b: &Binding) -> String {
    let k = match b.key {
        Key::Char(' ') => "space".to_string(),
        Key::Char(c) => c.to_string(),
        Key::Enter => "Enter".into(),
        Key::Escape => "Esc".into(),
        Key::Backspace => "Backspace".into(),
        Key::Delete => "Delete".into(),
        Key::Tab => "Tab".into(),
        Key::Left => "←".into(),
        Key::Right => "→".into(),
        Key::Up => "↑".into(),
        Key::Down => "↓".into(),
        Key::Home => "Home".into(),
        Key::F1 => "F1".into(),
    };
    if b.ctrl {
        format!("Ctrl+{k}")
    } else {
        k
    }
}

/// The help overlay's lines: `key — help`, grouped.
pub fn help_lines() -> Vec<String> {
    let mut out = Vec::new();
    let mut group = "";
    for b in bindings() {
        if b.group != group {
            group = b.group;
            out.push(format!("— {group} —"));
        }
        out.push(format!("{:<11} {}", key_name(&b), b.help));
    }
    out.push("— pointer —".into());
    for (k, h) in POINTER_HELP {
        out.push(format!("{k:<18} {h}"));
    }
    out
}

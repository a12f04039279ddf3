//! The operator's actions, the key map, the help and the safety text shown in the app.

use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

/// Everything the operator can ask for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Action {
    Help,
    /// Write the current view as an SVG picture beside the run files.
    Picture,
    Arm,
    LevelUp,
    LevelDown,
    Accept,
    Reject,
    SelectUp,
    SelectDown,
    SelectLatest,
    Estimator,
    View,
    ZoomIn,
    ZoomOut,
    ZoomReset,
    LogAxis,
    PanLeft,
    PanRight,
    CursorLeft,
    CursorRight,
    NextMode,
    Label,
    Save,
    Picker,
    Panel,
    Tap,
    AutoTap,
    NewRun,
    Quit,
}

/// The key map: (keys as shown, action, what it does). The help overlay is built from it.
pub const KEYS: &[(&str, Action, &str)] = &[
    ("?", Action::Help, "this help (Esc closes)"),
    ("a", Action::Arm, "arm / disarm the trigger"),
    ("+/-", Action::LevelUp, "trigger level up / down"),
    ("Up/Down", Action::SelectUp, "select a tap in the list"),
    ("End", Action::SelectLatest, "follow the latest tap"),
    ("y", Action::Accept, "keep the selected tap"),
    ("x", Action::Reject, "drop the selected tap"),
    ("e", Action::Estimator, "estimator H1 / H2"),
    ("v", Action::View, "FRF/spectrum/transmissib."),
    ("i/o", Action::ZoomIn, "zoom frequency in / out"),
    ("0", Action::ZoomReset, "whole search band"),
    ("g", Action::LogAxis, "log / linear freq. axis"),
    ("Left/Right", Action::CursorLeft, "move the cursor"),
    (",/.", Action::PanLeft, "pan the frequency axis"),
    ("m", Action::NextMode, "cursor to the next mode"),
    ("l", Action::Label, "set the variant label"),
    ("s", Action::Save, "save WAV + JSON + CSV now"),
    ("p", Action::Picker, "overlay/compare saved runs"),
    ("w", Action::Picture, "write this view as SVG"),
    ("c", Action::Panel, "modes / compare panel"),
    ("Space", Action::Tap, "simulated tap (demo)"),
    ("t", Action::AutoTap, "auto taps on/off (demo)"),
    ("n", Action::NewRun, "start a new run (new files)"),
    ("q", Action::Quit, "quit (asks if unsaved)"),
];

/// Safety cautions shown in the help overlay.
pub const SAFETY: &[&str] = &[
    "Before tapping: propellers OFF, flight battery DISCONNECTED, craft SECURED on the bench.",
    "Tap gently; a hard hammer blow can crack carbon or loosen parts.",
    "Numbers and band verdicts do not replace the manufacturer's guidance, local rules or a careful first hover.",
];

/// Map a key press to an action (normal mode).
pub fn action_for(key: &KeyEvent) -> Option<Action> {
    if key.modifiers.contains(KeyModifiers::CONTROL) {
        return match key.code {
            KeyCode::Char('c') => Some(Action::Quit),
            _ => None,
        };
    }
    Some(match key.code {
        KeyCode::Char('?') | KeyCode::F(1) => Action::Help,
        KeyCode::Char('a') => Action::Arm,
        KeyCode::Char('+') | KeyCode::Char('=') => Action::LevelUp,
        KeyCode::Char('-') | KeyCode::Char('_') => Action::LevelDown,
        KeyCode::Char('y') => Action::Accept,
        KeyCode::Char('x') => Action::Reject,
        KeyCode::Up | KeyCode::Char('k') => Action::SelectUp,
        KeyCode::Down | KeyCode::Char('j') => Action::SelectDown,
        KeyCode::End => Action::SelectLatest,
        KeyCode::Char('e') => Action::Estimator,
        KeyCode::Char('v') => Action::View,
        KeyCode::Char('i') => Action::ZoomIn,
        KeyCode::Char('o') => Action::ZoomOut,
        KeyCode::Char('0') => Action::ZoomReset,
        KeyCode::Char('g') => Action::LogAxis,
        KeyCode::Char(',') | KeyCode::Char('<') => Action::PanLeft,
        KeyCode::Char('.') | KeyCode::Char('>') => Action::PanRight,
        KeyCode::Left => Action::CursorLeft,
        KeyCode::Right => Action::CursorRight,
        KeyCode::Char('m') => Action::NextMode,
        KeyCode::Char('l') => Action::Label,
        KeyCode::Char('s') => Action::Save,
        KeyCode::Char('p') => Action::Picker,
        KeyCode::Char('w') => Action::Picture,
        KeyCode::Char('c') | KeyCode::Tab => Action::Panel,
        KeyCode::Char(' ') => Action::Tap,
        KeyCode::Char('t') => Action::AutoTap,
        KeyCode::Char('n') => Action::NewRun,
        KeyCode::Char('q') => Action::Quit,
        _ => return None,
    })
}

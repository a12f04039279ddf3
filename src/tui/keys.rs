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
    /// Read the selected tap in full (verdict, whole reason, peaks).
    TapDetail,
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
    /// Point walk: keep this take as the point's recording and go to the next point.
    KeepPoint,
    /// Point walk: go back one point.
    PointBack,
    /// Point walk: take this point again (a fresh take).
    Retake,
    /// Point walk: the next mode's shape bars.
    NextShape,
    Quit,
}

/// The key map: (keys as shown, action, what it does). The help overlay is built from it.
pub const KEYS: &[(&str, Action, &str)] = &[
    ("?", Action::Help, "this help (? next page)"),
    ("a", Action::Arm, "arm / disarm the trigger"),
    ("+/-", Action::LevelUp, "trigger level up / down"),
    ("Up/Down", Action::SelectUp, "select a tap in the list"),
    ("End", Action::SelectLatest, "follow the latest tap"),
    ("Enter", Action::TapDetail, "read the selected tap whole"),
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

/// Pages of the help overlay: keys, the words on screen (two pages), the workflow, the
/// strip test and the point walk.
pub const HELP_PAGES: usize = 5;

/// The strip test and the point walk (the help's last page).
pub const TASKS: &[&str] = &[
    "Strip test   tapmodes tui --strip-mm L:W:T --strip-g M",
    "  Hang the strip free: threads at 0.224 x length from each end.",
    "  E: tap the middle of the face on the centre line; sensor on it at one end.",
    "  G: tap near a corner; sensor near a corner of the other end.",
    "  The panel shows E and G (+-U, k = 2) and the modes taken; s also writes",
    "  NAME.strip.json beside the run files.",
    "Point walk   tapmodes tui --plan PLAN.txt",
    "  Tap the point named on the top line (5-10 taps), check coh, then",
    "  ]  keep the take as the plan's recording and open the next point",
    "  [  back one point     r  take this point again (the take so far stays)",
    "  A recording on disk is never overwritten. After the last point the shapes",
    "  are fitted over all points (PLAN.shapes.json); b shows the next mode(s).",
];

/// The abbreviations of the curve and the mode table (and the command line's tables), as
/// (term, meaning); a blank term continues the line above.
pub const WORDS_CURVE: &[(&str, &str)] = &[
    ("FRF", "frequency response: response per unit force (g/N)"),
    (
        "H1 / H2",
        "FRF estimates: H1 = cross / force spectrum (noise on",
    ),
    (
        "",
        "the response), H2 = response / cross (noise on the force)",
    ),
    (
        "coh",
        "coherence 0-1: share of the response the force explains;",
    ),
    (
        "",
        "near 1 at a mode = trustworthy, low = noise or double taps",
    ),
    (
        "f Hz, damp %",
        "mode frequency; damping ratio in % of critical",
    ),
    ("Q", "sharpness of a peak: 1 / (2 x damping ratio)"),
    (
        "prom dB",
        "how far a peak rises over the noise floor (tables)",
    ),
    (
        "95 % f / z",
        "95 % interval of the frequency (Hz) / damping (% pts)",
    ),
];

/// The abbreviations of the status line, the tap list and the comparison.
pub const WORDS_BOARD: &[(&str, &str)] = &[
    (
        "trig +-X N",
        "trigger level around the baseline, in the channel unit;",
    ),
    (
        "",
        "(10.0x) = times the measured noise, (abs) = a fixed level",
    ),
    ("lost N pkt", "serial packets lost or corrupt on the link"),
    (
        "overrun N",
        "samples dropped because the app fell behind the source",
    ),
    (
        "RECORDING",
        "a tap's record is filling: wait before the next tap",
    ),
    ("+ / x / *", "tap kept / dropped / decided by you (y, x)"),
    (
        "flags",
        "L few lines, O overlap, C low coherence, H no half-power",
    ),
    (
        "",
        "points, W damping mostly the window's (see Modes panel),",
    ),
    ("", "F fit only: found inside a neighbour's peak"),
    (
        "band",
        "mode in / near / clear of a motor band (rot = rotation,",
    ),
    ("", "2x, 3x its multiples, bp = blade pass)"),
    (
        "mount",
        "soft mount: frequency, damping, share of the curve the",
    ),
    (
        "",
        "fit leaves unexplained, isolation above 1.41 x frequency",
    ),
    (
        "df %, dz pts",
        "frequency change in %, damping change in % points",
    ),
    (
        "k ratio",
        "(f now / f saved)^2: stiffness ratio at equal mass",
    ),
];

/// The bench workflow in a few lines (the help's last page).
pub const WORKFLOW: &[&str] = &[
    "1  Secure the part, fix the sensor. a arms the trigger; +/- until the idle",
    "   signal stays inside the red trigger lines.",
    "2  Tap 5 to 10 times at one point (Space in the demo); let RECORDING end",
    "   before the next tap.",
    "3  Check coh near 1 at the modes. Up/Down picks a tap, Enter reads it whole,",
    "   x drops a bad tap (double hit, overload), y keeps it again.",
    "4  l names the variant; s saves WAV + JSON + CSV (taps are autosaved too).",
    "5  n starts the next variant with new files: change the part, tap again.",
    "6  p picks saved runs to overlay; c shows the comparison (df %, k ratio).",
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
        KeyCode::Enter => Action::TapDetail,
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
        KeyCode::Char(']') => Action::KeepPoint,
        KeyCode::Char('[') => Action::PointBack,
        KeyCode::Char('r') => Action::Retake,
        KeyCode::Char('b') => Action::NextShape,
        KeyCode::Char('q') => Action::Quit,
        _ => return None,
    })
}

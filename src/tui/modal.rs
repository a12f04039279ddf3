//! Keys while an overlay is open (help pages, the tap in full, label entry, run picker,
//! confirmations); on the board itself keys become actions (`keys::action_for`).

use super::engine::Cmd;
use super::keys::HELP_PAGES;
use super::model::{Action, Effect, MAX_LABEL, Mode, Model, act, action_for};
use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

/// A key press, by what the keyboard is talking to (the board or an overlay).
pub(super) fn key(m: &mut Model, k: KeyEvent, fx: &mut Vec<Effect>) {
    let ctrl_c = k.modifiers.contains(KeyModifiers::CONTROL) && k.code == KeyCode::Char('c');
    match m.mode.clone() {
        Mode::Normal => {
            if let Some(a) = action_for(&k) {
                m.notice = None;
                act(m, a, fx);
            }
        }
        Mode::Help(page) => {
            m.mode = Mode::Normal;
            match k.code {
                _ if ctrl_c => act(m, Action::Quit, fx),
                KeyCode::Char('?') | KeyCode::Right | KeyCode::Tab | KeyCode::PageDown
                    if page + 1 < HELP_PAGES =>
                {
                    m.mode = Mode::Help(page + 1);
                }
                KeyCode::Left | KeyCode::BackTab | KeyCode::PageUp => {
                    m.mode = Mode::Help(page.saturating_sub(1));
                }
                _ => {}
            }
        }
        Mode::TapDetail => match k.code {
            _ if ctrl_c => {
                m.mode = Mode::Normal;
                act(m, Action::Quit, fx);
            }
            KeyCode::Char('y') => act(m, Action::Accept, fx),
            KeyCode::Char('x') => act(m, Action::Reject, fx),
            KeyCode::Up | KeyCode::Char('k') => act(m, Action::SelectUp, fx),
            KeyCode::Down | KeyCode::Char('j') => act(m, Action::SelectDown, fx),
            _ => m.mode = Mode::Normal,
        },
        Mode::Label(mut buf) => match k.code {
            KeyCode::Enter => {
                m.mode = Mode::Normal;
                let label = buf.trim().to_string();
                if label.is_empty() {
                    m.notice = Some("the label stays as it was (empty)".into());
                } else if label != m.label {
                    m.label = label.clone();
                    m.send(Cmd::SetLabel(label), fx);
                }
            }
            KeyCode::Esc => m.mode = Mode::Normal,
            KeyCode::Backspace => {
                buf.pop();
                m.mode = Mode::Label(buf);
            }
            KeyCode::Char(c) if !ctrl_c => {
                if buf.chars().count() < MAX_LABEL && !c.is_control() {
                    buf.push(c);
                }
                m.mode = Mode::Label(buf);
            }
            _ => {
                if ctrl_c {
                    m.mode = Mode::Normal;
                }
            }
        },
        Mode::Picker { mut items, cursor } => match k.code {
            KeyCode::Up | KeyCode::Char('k') => {
                m.mode = Mode::Picker {
                    cursor: cursor.saturating_sub(1),
                    items,
                }
            }
            KeyCode::Down | KeyCode::Char('j') => {
                m.mode = Mode::Picker {
                    cursor: (cursor + 1).min(items.len().saturating_sub(1)),
                    items,
                }
            }
            KeyCode::Char(' ') | KeyCode::Char('x') => {
                if let Some(it) = items.get_mut(cursor) {
                    it.chosen = !it.chosen;
                }
                m.mode = Mode::Picker { items, cursor };
            }
            KeyCode::Enter => {
                m.mode = Mode::Normal;
                fx.push(Effect::LoadRuns(
                    items
                        .into_iter()
                        .filter(|i| i.chosen)
                        .map(|i| i.path)
                        .collect(),
                ));
            }
            _ => m.mode = Mode::Normal,
        },
        Mode::ConfirmQuit => match k.code {
            KeyCode::Char('s') => {
                m.send(Cmd::Save, fx);
                m.quit = true;
                fx.push(Effect::Quit);
            }
            KeyCode::Char('q') | KeyCode::Char('y') => {
                m.quit = true;
                fx.push(Effect::Quit);
            }
            _ if ctrl_c => {
                m.quit = true;
                fx.push(Effect::Quit);
            }
            _ => m.mode = Mode::Normal,
        },
        Mode::ConfirmLeave { to } => match k.code {
            KeyCode::Char('y') => super::task::open_point(m, to, fx),
            _ => m.mode = Mode::Normal,
        },
        Mode::ConfirmNewRun => match k.code {
            KeyCode::Char('s') => {
                m.send(Cmd::Save, fx);
                start_new_run(m, fx);
            }
            KeyCode::Char('n') | KeyCode::Char('y') => start_new_run(m, fx),
            _ => m.mode = Mode::Normal,
        },
    }
}

/// Close this run and start the next (new files, empty average).
pub(super) fn start_new_run(m: &mut Model, fx: &mut Vec<Effect>) {
    m.mode = Mode::Normal;
    m.selected = None;
    m.follow = true;
    m.send(Cmd::NewRun, fx);
    m.notice = Some("new run started: new recording, empty average".into());
}

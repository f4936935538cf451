//! The key table: a pure map from a key press (and what the view is doing) to an action.

use crossterm::event::{KeyCode, KeyEvent, KeyModifiers};

/// What a key does.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Action {
    /// Leave.
    Quit,
    /// Freeze or unfreeze the figures on screen (measurement goes on).
    Freeze,
    /// Forget the statistics and start again.
    Reset,
    /// Begin typing a mark.
    MarkStart,
    /// A character of the mark's text.
    MarkChar(char),
    /// Delete the last character of the mark.
    MarkBack,
    /// Store the mark.
    MarkDone,
    /// Abandon the mark.
    MarkCancel,
    /// Start or stop recording.
    Record,
    /// Switch between the recent window and the whole session.
    Window,
    /// Switch the distribution shown in the clock area.
    Detail,
    /// Show or hide the key help.
    Help,
    /// Replay: pause or resume.
    ReplayPause,
    /// Replay: twice as fast.
    Faster,
    /// Replay: half as fast.
    Slower,
    /// Replay: jump to the next mark.
    NextMark,
    /// Nothing.
    None,
}

/// The keys as shown on screen and in the help overlay:
/// (key, short label for the key bar, what it does, replay only).
pub const KEYS: &[(&str, &str, &str, bool)] = &[
    ("q", "quit", "quit", false),
    ("space", "freeze", "freeze / unfreeze the figures", false),
    ("r", "reset", "reset the statistics", false),
    ("m", "mark", "add a mark (type text, Enter)", false),
    ("R", "record", "start / stop recording", false),
    ("w", "window", "recent window / whole session", false),
    ("d", "detail", "distribution: period / high / low", false),
    ("?", "help", "this help", false),
    ("p", "pause", "pause / resume the replay", true),
    ("+ -", "speed", "replay faster / slower", true),
    ("n", "next mark", "jump to the next mark", true),
];

/// Map a key press to an action. `typing` is true while a mark's text is being typed.
pub fn action(key: KeyEvent, typing: bool, replay: bool) -> Action {
    if key.modifiers.contains(KeyModifiers::CONTROL) && key.code == KeyCode::Char('c') {
        return Action::Quit;
    }
    if typing {
        return match key.code {
            KeyCode::Enter => Action::MarkDone,
            KeyCode::Esc => Action::MarkCancel,
            KeyCode::Backspace => Action::MarkBack,
            KeyCode::Char(c) => Action::MarkChar(c),
            _ => Action::None,
        };
    }
    match key.code {
        KeyCode::Char('q') | KeyCode::Esc => Action::Quit,
        KeyCode::Char(' ') => Action::Freeze,
        KeyCode::Char('r') => Action::Reset,
        KeyCode::Char('m') => Action::MarkStart,
        KeyCode::Char('R') => Action::Record,
        KeyCode::Char('w') => Action::Window,
        KeyCode::Char('d') => Action::Detail,
        KeyCode::Char('?') | KeyCode::F(1) => Action::Help,
        KeyCode::Char('p') if replay => Action::ReplayPause,
        KeyCode::Char('+') | KeyCode::Char('=') if replay => Action::Faster,
        KeyCode::Char('-') if replay => Action::Slower,
        KeyCode::Char('n') if replay => Action::NextMark,
        _ => Action::None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn k(c: char) -> KeyEvent {
        KeyEvent::new(KeyCode::Char(c), KeyModifiers::NONE)
    }

    #[test]
    fn the_table() {
        assert_eq!(action(k('q'), false, false), Action::Quit);
        assert_eq!(action(k(' '), false, false), Action::Freeze);
        assert_eq!(action(k('r'), false, false), Action::Reset);
        assert_eq!(action(k('R'), false, false), Action::Record);
        assert_eq!(action(k('m'), false, false), Action::MarkStart);
        assert_eq!(action(k('w'), false, false), Action::Window);
        assert_eq!(action(k('d'), false, false), Action::Detail);
        assert_eq!(action(k('?'), false, false), Action::Help);
        assert_eq!(
            action(
                KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL),
                true,
                false
            ),
            Action::Quit
        );
    }

    #[test]
    fn typing_a_mark_takes_every_character() {
        assert_eq!(action(k('q'), true, false), Action::MarkChar('q'));
        assert_eq!(action(k(' '), true, false), Action::MarkChar(' '));
        assert_eq!(
            action(
                KeyEvent::new(KeyCode::Enter, KeyModifiers::NONE),
                true,
                false
            ),
            Action::MarkDone
        );
        assert_eq!(
            action(KeyEvent::new(KeyCode::Esc, KeyModifiers::NONE), true, false),
            Action::MarkCancel
        );
        assert_eq!(
            action(
                KeyEvent::new(KeyCode::Backspace, KeyModifiers::NONE),
                true,
                false
            ),
            Action::MarkBack
        );
    }

    #[test]
    fn replay_keys_only_in_replay() {
        assert_eq!(action(k('p'), false, false), Action::None);
        assert_eq!(action(k('p'), false, true), Action::ReplayPause);
        assert_eq!(action(k('+'), false, true), Action::Faster);
        assert_eq!(action(k('-'), false, true), Action::Slower);
        assert_eq!(action(k('n'), false, true), Action::NextMark);
    }
}

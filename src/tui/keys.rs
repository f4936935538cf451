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
    /// Show the next picture.
    Picture,
    /// List the next kind of event only (then all again).
    Filter,
    /// Scroll the events back by one.
    Up,
    /// Scroll the events on by one.
    Down,
    /// Follow the newest event again.
    End,
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

/// Where a key is offered.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Offered {
    /// Watching and replaying.
    Always,
    /// Only on a live source (marks and recordings of a replay would make useless files).
    Live,
    /// Only in a replay.
    Replay,
}

impl Offered {
    /// Whether the key is offered in a replay (`replay`) or on a live source.
    pub fn in_view(self, replay: bool) -> bool {
        match self {
            Offered::Always => true,
            Offered::Live => !replay,
            Offered::Replay => replay,
        }
    }
}

/// The keys as shown on screen and in the help overlay:
/// (key, short label for the key bar, what it does, where offered).
pub const KEYS: &[(&str, &str, &str, Offered)] = &[
    ("q", "quit", "quit", Offered::Always),
    (
        "space",
        "freeze",
        "freeze / unfreeze the figures",
        Offered::Always,
    ),
    ("r", "reset", "reset the statistics", Offered::Always),
    ("m", "mark", "add a mark (type text, Enter)", Offered::Live),
    (
        "R",
        "record",
        "record to a file (asks its name) / stop",
        Offered::Live,
    ),
    (
        "w",
        "window",
        "recent 10 s / whole session",
        Offered::Always,
    ),
    (
        "d",
        "picture",
        "next picture: frequency / slack / high / low / period / rails",
        Offered::Always,
    ),
    (
        "f",
        "filter",
        "events: all / marks / clock / rails / lines / failures / host",
        Offered::Always,
    ),
    (
        "↑ ↓ End",
        "scroll",
        "scroll the events; End follows the newest",
        Offered::Always,
    ),
    ("?", "help", "this help", Offered::Always),
    ("p", "pause", "pause / resume the replay", Offered::Replay),
    ("+ -", "speed", "replay faster / slower", Offered::Replay),
    ("n", "next mark", "jump to the next mark", Offered::Replay),
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
        KeyCode::Char('m') if !replay => Action::MarkStart,
        KeyCode::Char('R') if !replay => Action::Record,
        KeyCode::Char('w') => Action::Window,
        KeyCode::Char('d') => Action::Picture,
        KeyCode::Char('f') => Action::Filter,
        KeyCode::Up => Action::Up,
        KeyCode::Down => Action::Down,
        KeyCode::End => Action::End,
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
        assert_eq!(action(k('d'), false, false), Action::Picture);
        assert_eq!(action(k('f'), false, false), Action::Filter);
        assert_eq!(
            action(
                KeyEvent::new(KeyCode::End, KeyModifiers::NONE),
                false,
                false
            ),
            Action::End
        );
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

    #[test]
    fn marks_and_recordings_only_on_a_live_source() {
        assert_eq!(action(k('m'), false, true), Action::None);
        assert_eq!(action(k('R'), false, true), Action::None);
        assert!(
            KEYS.iter()
                .filter(|k| k.3.in_view(true))
                .all(|k| k.0 != "m" && k.0 != "R")
        );
    }
}

//! The live view's state and its pure updates (keys, link events, snapshots).

use crate::margin::Margin;
use crate::measure::{Snapshot, Window};

use super::keys::Action;

/// The source of data and its state.
#[derive(Clone, Debug, PartialEq)]
pub enum Source {
    /// Opening the port and waiting for the probe.
    Connecting {
        /// What is being opened.
        what: String,
    },
    /// Data flowing.
    Streaming {
        /// The probe's firmware.
        probe: String,
        /// Times the link came back.
        reconnects: u32,
    },
    /// The link is gone; retrying.
    Lost {
        /// Why.
        reason: String,
        /// Seconds until the next attempt.
        retry_in_s: f64,
    },
    /// A recording being replayed.
    Replay {
        /// File.
        file: String,
        /// Seconds into the recording.
        at_s: f64,
        /// Paused.
        paused: bool,
        /// Speed factor.
        speed: f64,
        /// Finished.
        done: bool,
    },
}

/// The distribution shown in the clock area.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Detail {
    /// Period.
    Period,
    /// High time.
    High,
    /// Low time.
    Low,
}

/// One line of the events list.
#[derive(Clone, Debug, PartialEq)]
pub struct EventLine {
    /// Probe (or replay) time, s.
    pub at_s: f64,
    /// Text.
    pub text: String,
}

/// Everything the view draws.
#[derive(Clone, Debug)]
pub struct App {
    /// Data source.
    pub source: Source,
    /// Recording file and its size, when recording.
    pub recording: Option<(String, u64)>,
    /// Figures on screen.
    pub snapshot: Option<Snapshot>,
    /// Margin on screen (with a design).
    pub margin: Option<Margin>,
    /// Name of the design judged against.
    pub design: Option<String>,
    /// Which window the figures cover.
    pub window: Window,
    /// The distribution shown.
    pub detail: Detail,
    /// Figures frozen.
    pub frozen: bool,
    /// Help overlay shown.
    pub help: bool,
    /// A mark being typed.
    pub typing: Option<String>,
    /// Events, newest last (capped).
    pub events: Vec<EventLine>,
    /// Whether colour may be used (NO_COLOR unset).
    pub color: bool,
    /// Asked to quit.
    pub quit: bool,
    /// Something changed since the last draw.
    pub dirty: bool,
    /// Recent history of each rail (lowest value per update, mV), oldest first.
    pub rail_history: std::collections::BTreeMap<String, std::collections::VecDeque<f64>>,
}

/// Updates kept in a rail's history (four a second: 15 s).
pub const HISTORY: usize = 60;

/// What the loop must do after an action.
#[derive(Clone, Debug, PartialEq)]
pub enum Effect {
    /// Nothing beyond redrawing.
    None,
    /// Reset the engine.
    Reset,
    /// Store a mark with this text.
    Mark(String),
    /// Start or stop the recorder.
    ToggleRecord,
    /// Replay control.
    ReplayPause,
    /// Replay speed ×2.
    Faster,
    /// Replay speed ÷2.
    Slower,
    /// Replay: to the next mark.
    NextMark,
}

const MAX_EVENTS: usize = 200;

impl App {
    /// A view of `source`.
    pub fn new(source: Source, design: Option<String>, color: bool) -> App {
        App {
            source,
            recording: None,
            snapshot: None,
            margin: None,
            design,
            window: Window::Recent,
            detail: Detail::Period,
            frozen: false,
            help: false,
            typing: None,
            events: Vec::new(),
            color,
            quit: false,
            dirty: true,
            rail_history: std::collections::BTreeMap::new(),
        }
    }

    /// Add an event line.
    pub fn event(&mut self, at_s: f64, text: impl Into<String>) {
        if self.events.len() >= MAX_EVENTS {
            self.events.remove(0);
        }
        self.events.push(EventLine {
            at_s,
            text: text.into(),
        });
        self.dirty = true;
    }

    /// New figures (ignored while frozen).
    pub fn show(&mut self, snap: Snapshot, margin: Option<Margin>) {
        for r in &snap.rails {
            if let Some(v) = r.now_mv {
                let h = self.rail_history.entry(r.name.clone()).or_default();
                if h.len() >= HISTORY {
                    h.pop_front();
                }
                h.push_back(v);
            }
        }
        if !self.frozen {
            self.snapshot = Some(snap);
            self.margin = margin;
            self.dirty = true;
        }
    }

    /// Apply a key action; returns what the loop must do.
    pub fn apply(&mut self, a: Action) -> Effect {
        self.dirty = true;
        match a {
            Action::Quit => {
                self.quit = true;
                Effect::None
            }
            Action::Freeze => {
                self.frozen = !self.frozen;
                Effect::None
            }
            Action::Reset => {
                self.events.clear();
                Effect::Reset
            }
            Action::MarkStart => {
                self.typing = Some(String::new());
                Effect::None
            }
            Action::MarkChar(c) => {
                if let Some(t) = &mut self.typing
                    && t.len() < 120
                {
                    t.push(c);
                }
                Effect::None
            }
            Action::MarkBack => {
                if let Some(t) = &mut self.typing {
                    t.pop();
                }
                Effect::None
            }
            Action::MarkDone => match self.typing.take() {
                Some(t) => {
                    let text = if t.trim().is_empty() {
                        "mark".to_string()
                    } else {
                        t
                    };
                    let at = self.snapshot.as_ref().map_or(0.0, |s| s.probe_time_s);
                    self.event(at, format!("mark: {text}"));
                    Effect::Mark(text)
                }
                None => Effect::None,
            },
            Action::MarkCancel => {
                self.typing = None;
                Effect::None
            }
            Action::Record => Effect::ToggleRecord,
            Action::Window => {
                self.window = if self.window == Window::Recent {
                    Window::Session
                } else {
                    Window::Recent
                };
                Effect::None
            }
            Action::Detail => {
                self.detail = match self.detail {
                    Detail::Period => Detail::High,
                    Detail::High => Detail::Low,
                    Detail::Low => Detail::Period,
                };
                Effect::None
            }
            Action::Help => {
                self.help = !self.help;
                Effect::None
            }
            Action::ReplayPause => Effect::ReplayPause,
            Action::Faster => Effect::Faster,
            Action::Slower => Effect::Slower,
            Action::NextMark => Effect::NextMark,
            Action::None => {
                self.dirty = false;
                Effect::None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_mark_is_typed_and_stored() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        assert_eq!(a.apply(Action::MarkStart), Effect::None);
        for c in "added cap".chars() {
            a.apply(Action::MarkChar(c));
        }
        a.apply(Action::MarkBack);
        assert_eq!(a.apply(Action::MarkDone), Effect::Mark("added ca".into()));
        assert!(a.typing.is_none());
        assert!(a.events.last().unwrap().text.contains("added ca"));
    }

    #[test]
    fn freeze_window_detail_help_quit() {
        let mut a = App::new(Source::Connecting { what: "x".into() }, None, true);
        a.apply(Action::Freeze);
        assert!(a.frozen);
        a.apply(Action::Window);
        assert_eq!(a.window, Window::Session);
        a.apply(Action::Detail);
        assert_eq!(a.detail, Detail::High);
        a.apply(Action::Help);
        assert!(a.help);
        assert_eq!(a.apply(Action::Reset), Effect::Reset);
        assert_eq!(a.apply(Action::Record), Effect::ToggleRecord);
        a.apply(Action::Quit);
        assert!(a.quit);
    }
}

//! What the live view's state is made of: the pictures, the kinds of event and their lines, the
//! prompt, the recording's status.

/// The picture shown (`d` cycles them).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Picture {
    /// The clock's frequency over time.
    Frequency,
    /// Each phase's slack over time, in % of its requirement, with zero and the guard band.
    Slack,
    /// Histogram of the high times, with the high phase's requirement.
    High,
    /// Histogram of the low times, with the low phase's requirement.
    Low,
    /// Histogram of the periods, with the period's requirement.
    Period,
    /// Each rail's lowest value over time against its limit.
    Rails,
}

impl Picture {
    /// All, in the order `d` shows them.
    pub const ALL: [Picture; 6] = [
        Picture::Frequency,
        Picture::Slack,
        Picture::High,
        Picture::Low,
        Picture::Period,
        Picture::Rails,
    ];

    /// Its name on screen (the footer and the help use the same words).
    pub fn name(self) -> &'static str {
        match self {
            Picture::Frequency => "frequency",
            Picture::Slack => "slack",
            Picture::High => "high",
            Picture::Low => "low",
            Picture::Period => "period",
            Picture::Rails => "rails",
        }
    }

    pub(super) fn next(self) -> Picture {
        match self {
            Picture::Frequency => Picture::Slack,
            Picture::Slack => Picture::High,
            Picture::High => Picture::Low,
            Picture::Low => Picture::Period,
            Picture::Period => Picture::Rails,
            Picture::Rails => Picture::Frequency,
        }
    }
}

/// What an event is about (the events list filters by it).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum EventKind {
    /// A mark typed by someone at the bench.
    Mark,
    /// The clock: glitches.
    Clock,
    /// A rail: sags.
    Rail,
    /// A line changed level.
    Line,
    /// The machine failed.
    Failure,
    /// The host's side: the link, the recorder, the probe's answers.
    Host,
}

impl EventKind {
    /// Its name in the events list's title.
    pub fn name(self) -> &'static str {
        match self {
            EventKind::Mark => "marks",
            EventKind::Clock => "clock",
            EventKind::Rail => "rails",
            EventKind::Line => "lines",
            EventKind::Failure => "failures",
            EventKind::Host => "host",
        }
    }

    /// The filter after `f` (None: every kind).
    pub(super) fn next_filter(f: Option<EventKind>) -> Option<EventKind> {
        match f {
            None => Some(EventKind::Mark),
            Some(EventKind::Mark) => Some(EventKind::Clock),
            Some(EventKind::Clock) => Some(EventKind::Rail),
            Some(EventKind::Rail) => Some(EventKind::Line),
            Some(EventKind::Line) => Some(EventKind::Failure),
            Some(EventKind::Failure) => Some(EventKind::Host),
            Some(EventKind::Host) => None,
        }
    }

    /// The kind a text of the events list speaks of (by its first words).
    pub(super) fn of_text(text: &str) -> EventKind {
        if text.starts_with("mark: ") {
            EventKind::Mark
        } else if text.starts_with("sag on ") {
            EventKind::Rail
        } else if text.contains("glitch") {
            EventKind::Clock
        } else if text.starts_with("FAILURE") {
            EventKind::Failure
        } else {
            EventKind::Host
        }
    }
}

/// One line of the events list.
#[derive(Clone, Debug, PartialEq)]
pub struct EventLine {
    /// Probe (or replay) time, s; host time for the host's events (their text says "host").
    pub at_s: f64,
    /// What it is about.
    pub kind: EventKind,
    /// Text.
    pub text: String,
}

/// What a text prompt asks for.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Ask {
    /// A mark's text.
    Mark,
    /// The file to record into.
    RecordFile,
}

/// A text being typed in a prompt.
#[derive(Clone, Debug, PartialEq)]
pub struct Prompt {
    /// What for.
    pub ask: Ask,
    /// The text so far.
    pub text: String,
}

/// The recording under way, as the status line shows it.
#[derive(Clone, Debug, PartialEq)]
pub struct RecStatus {
    /// File.
    pub path: String,
    /// Bytes written so far.
    pub bytes: u64,
    /// Recent write rate, bytes per second (None until two readings).
    pub rate_bytes_per_s: Option<f64>,
    /// (host s, bytes) of the reading the rate starts from.
    pub(super) since: (f64, u64),
}

//! The one event type of a session, whatever its source, and why a session fails.

use std::time::Duration;

use crate::link::LinkError;
use crate::probe::ProbeDesc;
use crate::record::{LinkNote, RecordingError};

/// Why a session could not start, or its source gave up.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum SessionError {
    /// The link to the probe.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Link(#[from] LinkError),
    /// The recording to replay.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Recording(#[from] RecordingError),
}

/// Everything a session reports, whatever its source.
#[derive(Debug)]
pub enum Event {
    /// Opening the port and waiting for the probe (attempt number from 1).
    Connecting {
        /// Attempt.
        attempt: u32,
    },
    /// The probe described itself and streams (the virtual probe: its first HELLO).
    Connected {
        /// The self-description.
        probe: ProbeDesc,
        /// How many times the link has come back.
        reconnects: u32,
    },
    /// Probe bytes as received (already fed to the engine and any recording).
    Data {
        /// Host receive time, ns since the Unix epoch.
        host_ns: u64,
        /// The bytes.
        bytes: Vec<u8>,
    },
    /// The probe refused a setting (the session goes on).
    Refused {
        /// Which command.
        what: String,
        /// The result's meaning.
        reason: String,
    },
    /// The device went away or fell silent.
    Lost {
        /// Why.
        reason: String,
    },
    /// Waiting before the next attempt.
    Retrying {
        /// When.
        retry_in: Duration,
        /// Why the last attempt failed.
        reason: String,
    },
    /// The source gave up.
    Failed(SessionError),
    /// Replay: a link event as recorded.
    Recorded {
        /// Seconds into the recording.
        at_s: f64,
        /// The event.
        note: LinkNote,
    },
    /// Replay: a mark.
    Mark {
        /// Seconds into the recording.
        at_s: f64,
        /// Its text.
        text: String,
    },
    /// Replay: the position reached.
    Position {
        /// Seconds into the recording.
        at_s: f64,
    },
    /// The source has nothing more (the end of a replay or of a timed virtual probe).
    End,
    /// The recording's writer failed: the recording has stopped.
    RecordingFailed(RecordingError),
}

//! The link events a recording keeps (chunk kind 3), as one typed event: the recorder writes
//! them as JSON and every replay reads them back through the same type (docs/RECORDING.md).

use serde::{Deserialize, Serialize};

/// A link event as written into a recording.
#[derive(Clone, Debug, PartialEq, Eq, Serialize, Deserialize)]
#[serde(tag = "event", rename_all = "kebab-case")]
pub enum LinkNote {
    /// The probe answered (again): `reconnects` counts the returns of the link.
    Connected {
        /// Times the link has come back.
        reconnects: u32,
        /// The probe's firmware, when known.
        #[serde(default, skip_serializing_if = "Option::is_none")]
        firmware: Option<String>,
    },
    /// The device went away or fell silent.
    Lost {
        /// Why.
        reason: String,
    },
    /// The probe refused a configuration command (the session went on).
    Refused {
        /// Which command.
        what: String,
        /// The result's meaning.
        reason: String,
    },
    /// The recording joins a stream already running: the data chunk before holds the probe's
    /// last self-description, the data after starts at a frame boundary.
    Joined,
    /// The recorder's queue overflowed and probe bytes were dropped.
    RecorderOverflow {
        /// How many.
        dropped_bytes: u64,
    },
}

/// What a recorded link event means to the decoder and engine reading on.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Continuity {
    /// Nothing changes.
    Unbroken,
    /// The link came back: count a reconnect, restart sequence tracking, break continuity.
    Reconnected,
    /// The stream was joined mid-way: restart sequence tracking, count nothing.
    Joined,
}

impl LinkNote {
    /// The note in a link chunk's payload (None for events this build does not know).
    pub fn parse(payload: &[u8]) -> Option<LinkNote> {
        serde_json::from_slice(payload).ok()
    }

    /// The JSON written into the file.
    pub fn to_json(&self) -> String {
        serde_json::to_string(self).unwrap_or_else(|_| "{}".into())
    }

    /// What the event means for a replay.
    pub fn continuity(&self) -> Continuity {
        match self {
            LinkNote::Connected { reconnects, .. } if *reconnects > 0 => Continuity::Reconnected,
            LinkNote::Joined => Continuity::Joined,
            _ => Continuity::Unbroken,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_json_of_every_event_reads_back() {
        let notes = [
            LinkNote::Connected {
                reconnects: 2,
                firmware: Some("probe 1".into()),
            },
            LinkNote::Connected {
                reconnects: 0,
                firmware: None,
            },
            LinkNote::Lost {
                reason: "device lost".into(),
            },
            LinkNote::Refused {
                what: "CONFIGURE".into(),
                reason: "no such channel".into(),
            },
            LinkNote::Joined,
            LinkNote::RecorderOverflow { dropped_bytes: 9 },
        ];
        for n in notes {
            assert_eq!(LinkNote::parse(n.to_json().as_bytes()), Some(n));
        }
        // the form written by earlier builds
        assert_eq!(
            LinkNote::parse(br#"{"event":"connected","reconnects":1,"firmware":"x"}"#)
                .map(|n| n.continuity()),
            Some(Continuity::Reconnected)
        );
        assert_eq!(
            LinkNote::Joined.to_json(),
            r#"{"event":"joined"}"#,
            "documented in docs/RECORDING.md"
        );
        assert_eq!(LinkNote::parse(br#"{"event":"unheard-of"}"#), None);
    }
}

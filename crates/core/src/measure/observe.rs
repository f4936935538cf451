//! Watching the engine: an [`Observer`] given to a [`Feed`](super::Feed) sees every validated
//! event as the engine takes it and, when it asks, the TIE records the clock figures were taken
//! from (so glitch and continuity decisions are the engine's own). Exports and plots use it
//! instead of decoding the bytes a second time; the plain feed's observer does nothing and
//! costs nothing.

use super::ingest::Event;

/// Something that watches what the engine takes in.
pub trait Observer {
    /// An event, right after the engine took it.
    fn event(&mut self, _event: &Event<'_>) {}

    /// Whether the clocks should keep their full TIE records for [`Observer::tie_record`]
    /// (a copy per record).
    fn wants_tie_records(&self) -> bool {
        false
    }

    /// A full TIE record of a clock channel: the committed rising edges (engine ticks) one
    /// detrended record of the figures was taken from. Glitch edges were set aside and no
    /// record spans a continuity break.
    fn tie_record(&mut self, _channel: u8, _rises: &[u64]) {}

    /// The statistics were reset (`Feed::reset`, e.g. the start of `--from`): what was seen
    /// before no longer counts.
    fn reset(&mut self) {}
}

/// The observer of a plain feed: sees nothing.
#[derive(Clone, Copy, Debug, Default)]
pub struct NoObserver;

impl Observer for NoObserver {}

/// An observer that may be absent (e.g. plots only when asked for).
impl<O: Observer> Observer for Option<O> {
    fn event(&mut self, event: &Event<'_>) {
        if let Some(o) = self {
            o.event(event);
        }
    }
    fn wants_tie_records(&self) -> bool {
        self.as_ref().is_some_and(O::wants_tie_records)
    }
    fn tie_record(&mut self, channel: u8, rises: &[u64]) {
        if let Some(o) = self {
            o.tie_record(channel, rises);
        }
    }
    fn reset(&mut self) {
        if let Some(o) = self {
            o.reset();
        }
    }
}

//! Human-readable and machine-readable renderings of analysis results (pure).

pub mod budget;
pub mod margin;
pub mod markdown;
pub mod over_time;
pub mod plots;
pub mod recording;
pub mod series;
pub mod table;

use slackmeter_core::measure::{Feed, Observer};

/// A recording replays into the measurement engine's byte feed (with whatever observes it).
impl<O: Observer> crate::record::replay::ReplaySink for Feed<O> {
    fn data(&mut self, bytes: &[u8]) {
        self.push(bytes);
    }
    fn reconnect(&mut self) {
        self.note_reconnect();
    }
    fn joined(&mut self) {
        self.restart_sequence();
    }
    fn reset(&mut self) {
        Feed::reset(self);
    }
    fn probe_time_s(&self) -> f64 {
        self.engine.snapshot_time_s()
    }
}

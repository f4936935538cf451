//! The measurement engine: decoded probe messages in, a [`Snapshot`] of measured timing out.
//! Pure and synchronous: no I/O, no knowledge of where the bytes come from.
//!
//! The path: [`Feed`] (bytes → frames) → `ingest` (messages → validated [`Event`]s on one
//! timeline: the only place ticks are offset and checked) → `engine` (per-channel statistics
//! in `blocks`, figures in a [`Snapshot`], failure onsets from `onset`, the time-resolved
//! `series` and how a moving clock moved in `spread`). An [`Observer`] on
//! the feed sees the same events and the clock's TIE records (exports, plots).

mod allan;
mod blocks;
pub mod clock;
mod engine;
mod feed;
mod ingest;
mod lines;
mod observe;
mod onset;
mod rails;
mod ripple;
mod series;
mod snapshot;
mod spread;
mod stats;

pub use clock::{ClockConfig, ClockSnapshot, Glitch, Stall};
pub use engine::{Engine, EngineConfig};
pub use feed::Feed;
pub use ingest::{BreakCause, Count, Event, Extremes, MAX_SHORT_STAMPS, Sample, ThresholdCount};
pub use lines::{LineEvent, LineSnapshot};
pub use observe::{NoObserver, Observer};
pub use rails::{RailConfig, RailSnapshot, Sag};
pub use series::{INTERVAL_S, MAX_POINTS, Series, SeriesPoint};
pub use snapshot::{FaultOnset, Snapshot, Trust, Window};
pub use spread::{Movement, movement, series_moves};
pub use stats::DevHistogram;

//! Clock statistics of one edge channel: streaming over edge timestamps (or count windows),
//! mergeable per block, with every figure's uncertainty derived from the probe's tick.
//!
//! By concern: `config` (settings and shared constants), `acc` (block accumulators, fit and run
//! sums), `state` (the per-edge state machine, the reference path), `bulk` (clean stretches as
//! arrays, identical to the per-edge path), `buffers` (their working arrays), `tie` (detrended
//! TIE records), `count` (count windows), `extremes` (window extremes and threshold counts), `figures` (what is reported), `snapshot` (the
//! figures and their uncertainty model) and `walk` (the quantisation a mean keeps when the
//! edges sit on few phases of the tick).

mod acc;
mod buffers;
mod bulk;
mod config;
mod count;
mod extremes;
mod figures;
mod snapshot;
mod state;
mod tie;
mod walk;

pub use acc::ClockAcc;
pub(crate) use acc::ShortRun;
pub use config::{ClockConfig, K};
pub use figures::{
    AllanPoint, ClockSnapshot, NCycle, Percentiles, ShortPhaseEvent, ThresholdViolations,
    Unavailable,
};
pub use snapshot::snapshot;
pub use state::{ClockState, Glitch, Stall};
pub use tie::detrended;

#[cfg(test)]
mod equivalence;

//! Settings of the clock statistics, and the constants both clock paths share.

use serde::Serialize;

/// Settings of the clock statistics.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClockConfig {
    /// A pulse shorter than this fraction of the typical phase of its polarity (plus one tick)
    /// is held back and decided with its neighbours: a runt, or a real phase. At 0.5 every
    /// extra pulse inside a phase leaves one fragment under it, whatever the duty.
    pub glitch_fraction: f64,
    /// Or an absolute glitch threshold in ns (overrides the fraction): a pulse under it is
    /// always set aside.
    pub glitch_ns: Option<f64>,
    /// No edge for more than this many nominal periods is a stall.
    pub stall_periods: f64,
    /// Cycle counts N of the N-cycle error.
    pub n_cycles: [u32; 2],
    /// Cycles per detrended TIE record.
    pub tie_record: usize,
    /// Spacing of the phase samples for the Allan deviation.
    pub allan_tau0_s: f64,
    /// Events kept per list.
    pub max_events: usize,
}

impl Default for ClockConfig {
    fn default() -> Self {
        ClockConfig {
            glitch_fraction: 0.5,
            glitch_ns: None,
            stall_periods: 4.0,
            n_cycles: [10, 100],
            tie_record: 1024,
            allan_tau0_s: 1e-3,
            max_events: 1000,
        }
    }
}

/// Coverage factor of every expanded uncertainty.
pub const K: f64 = 2.5;

/// A gap longer than this (in ticks) is never one period: continuity restarts after it, which
/// also bounds every sum of periods.
pub const MAX_GAP_TICKS: u64 = 1 << 40;

/// Two edges of one polarity closer than this fraction of the typical period hold the newer
/// one back for the glitch decision (an extra pulse wider than a short real phase still splits
/// a cycle into two parts, one of them under this; common practice, no source). When the
/// period less half the shorter phase (and a tick) is later, that holds instead (`state.rs`).
pub const SPACING_FRACTION: f64 = 0.85;

/// Periods between refreshes of the glitch and stall thresholds: the typical period, high and
/// low time are the means over the previous such segment (the first refresh comes with the
/// first period).
pub const REFRESH: u32 = 512;

/// Periods of the first refresh segments (1, 16, 256): a new seed within them drops the cycles
/// judged with the old one from the figures.
pub const SEEDED_CYCLES: u64 = 1 + 16 + 256;

/// Periods per batch: summing 256 contiguous periods lifts their random walk far above the
/// quantisation of the two end stamps, so period noise is measurable even below one tick.
pub const BATCH: u32 = 256;

/// Length of a short run (the stretch of cycles a failure onset is read from), ns.
pub const SHORT_RUN_NS: f64 = 20e6;

/// Fewest rises a contiguous stretch needs for its TIE to count (a line passes through two
/// exactly: they say nothing about phase noise).
pub const MIN_TIE_STRETCH: i128 = 3;

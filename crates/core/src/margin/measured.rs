//! How the clock was observed, as the clock figures say: the share of cycles the worst cycles
//! were taken from, the way the probe observed them, and whether the clock moved. One small
//! adapter, so that the margin reads these figures in one place.

use crate::measure::{ClockSnapshot, Series};

/// Share of the clock's cycles that were observed one by one (None: not stated).
pub(super) fn coverage(c: &ClockSnapshot) -> Option<f64> {
    c.coverage
}

/// How the probe observed the clock, in words (None: not stated).
pub(super) fn observation(c: &ClockSnapshot) -> Option<String> {
    Some(c.observation.clone())
}

/// Whether the clock's frequency moved by more than its uncertainty allows (None: not stated).
pub(super) fn moving(_c: &ClockSnapshot) -> Option<bool> {
    None
}

/// Share of the clock's cycles timed one by one, estimated from the series where the clock
/// figures do not state it: the cycles timed against the cycles that elapsed (each interval's
/// frequency × its time, clipped to the span of the timed cycles). None for a counting probe.
pub(super) fn coverage_from_series(series: &Series, c: &ClockSnapshot) -> Option<f64> {
    if c.cycles == 0 {
        return None;
    }
    let pts: Vec<_> = series.clock_points().collect();
    let start = pts.iter().find_map(|p| p.observed_from_s)?;
    let end = pts.iter().rev().find_map(|p| p.observed_to_s)?;
    let (timed, elapsed) = pts.iter().fold((0u64, 0.0f64), |(n, e), p| {
        let span = (p.to_s.min(end) - p.from_s.max(start)).max(0.0);
        (n + p.cycles, e + p.frequency_hz.unwrap_or(0.0) * span)
    });
    (elapsed >= 1.0).then(|| (timed as f64 / elapsed).min(1.0))
}

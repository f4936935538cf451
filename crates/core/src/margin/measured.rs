//! How the clock was observed, as the clock figures say: the share of cycles the worst cycles
//! were taken from, the way the probe observed them, and whether the clock moved. One small
//! adapter, so that the margin reads these figures in one place.

use crate::measure::ClockSnapshot;

/// Share of the clock's cycles that were observed one by one (None: not stated).
pub(super) fn coverage(_c: &ClockSnapshot) -> Option<f64> {
    None
}

/// How the probe observed the clock, in words (None: not stated).
pub(super) fn observation(_c: &ClockSnapshot) -> Option<String> {
    None
}

/// Whether the clock's frequency moved by more than its uncertainty allows (None: not stated).
pub(super) fn moving(_c: &ClockSnapshot) -> Option<bool> {
    None
}

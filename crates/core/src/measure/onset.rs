//! Failure onsets: the clock's figures at the moment the machine failed (the fault line rose, or
//! the heartbeat stopped), from the short runs of cycles observed just before.

use super::clock::{ClockState, K, ShortRun};
use super::snapshot::FaultOnset;

/// Short runs with fewer cycles than this are not an observation of their own.
const MIN_RUN_CYCLES: u64 = 16;

/// The onset at `tick`: the newest observation with enough cycles, extrapolated along the trend
/// from the one before it to the fault's time; `rail` is the lowest rail's latest value. None
/// before the clock has a short run.
pub(super) fn onset_at(
    tick: u64,
    cause: &str,
    clock: &ClockState,
    rail: Option<(String, f64)>,
) -> Option<FaultOnset> {
    let q = clock.tick_ns();
    let t = tick as f64 * q * 1e-9;
    let mut obs: Vec<ShortRun> = clock.runs.iter().flatten().copied().collect();
    if let Some(cur) = clock.current_run()
        && cur.cycles >= MIN_RUN_CYCLES
    {
        obs.push(cur);
    }
    let last = obs.last().copied()?;
    // one tick over the run, relative: the run's own resolution in frequency
    let resolution_hz =
        |r: &ShortRun| r.frequency_hz * q * 1e-9 * r.frequency_hz / r.cycles.max(1) as f64;
    let (f, u) = match obs.len() {
        n if n >= 2 => {
            let prev = obs[n - 2];
            let dt = last.end_s - prev.end_s;
            let slope = if dt > 0.0 {
                (last.frequency_hz - prev.frequency_hz) / dt
            } else {
                0.0
            };
            let ahead = (t - last.end_s).max(0.0);
            // the failure lies between the last observation and the fault edge
            let f = last.frequency_hz + slope * ahead * 0.5;
            (
                f,
                K * (slope.abs() * ahead * 0.5 / 3f64.sqrt()).max(resolution_hz(&last)),
            )
        }
        _ => (last.frequency_hz, K * resolution_hz(&last)),
    };
    Some(FaultOnset {
        cause: cause.to_string(),
        at_s: t,
        frequency_hz: f,
        frequency_uncertainty_hz: u,
        duty: last.duty,
        high_min_ns: last.high_min_ns,
        low_min_ns: last.low_min_ns,
        rail,
    })
}

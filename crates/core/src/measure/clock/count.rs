//! Count windows: what a probe that cannot stamp every edge sends (gated or reciprocal counts
//! and level samples), accumulated per block, and the few figures they give.

use super::super::stats::wilson_95;
use super::acc::ClockAcc;
use super::config::K;
use super::figures::ClockSnapshot;
use super::state::ClockState;

impl ClockState {
    /// A count window (for probes that cannot stamp every edge).
    pub fn count_window(
        &mut self,
        reciprocal: bool,
        gate_ticks: u32,
        edges: u32,
        samples: u32,
        samples_high: u32,
    ) {
        if self.acc.is_none() {
            // references from the counted frequency, so blocks can merge
            let p = if edges > 0 {
                (f64::from(gate_ticks) / f64::from(edges)).round().max(1.0) as i64
            } else {
                1
            };
            if self.refs.is_none() {
                self.refs = Some((p, (p / 2).max(1), (p - p / 2).max(1)));
            }
            self.acc = self.empty_acc();
        }
        let a = self.acc.as_mut().expect("block exists");
        a.count_edges += u64::from(edges);
        a.count_ticks += u64::from(gate_ticks);
        a.count_windows += 1;
        a.count_reciprocal |= reciprocal;
        a.samples += u64::from(samples);
        a.samples_high += u64::from(samples_high);
    }
}

/// Whether a block holds count windows only (a counting probe: no single cycle seen).
pub(super) fn counted_only(a: &ClockAcc) -> bool {
    a.period.n == 0 && a.count_windows > 0
}

/// The figures of a counting probe's block: frequency (±1 count or ±1 tick per window) and the
/// sampled duty (Wilson interval); the per-cycle figures are marked unobservable.
pub(super) fn counted_figures(s: &mut ClockSnapshot, a: &ClockAcc, timebase_ppm: u16) {
    let tick_s = s.resolution_ns * 1e-9;
    s.method = if a.count_reciprocal {
        "count windows (reciprocal)".into()
    } else {
        "count windows (gated)".into()
    };
    if a.count_ticks > 0 {
        let f = a.count_edges as f64 / (a.count_ticks as f64 * tick_s);
        s.frequency_hz = Some(f);
        // ±1 count (gated) or ±1 tick over the gate (reciprocal), per window, in quadrature
        let per = if a.count_reciprocal {
            f / a.count_ticks as f64
        } else {
            1.0 / (a.count_ticks as f64 * tick_s)
        };
        s.frequency_uncertainty_hz = Some(K * per * (a.count_windows as f64).sqrt() / 3f64.sqrt());
    }
    if a.samples > 0 {
        let p = a.samples_high as f64 / a.samples as f64;
        let (lo, hi) = wilson_95(a.samples_high, a.samples).unwrap_or((0.0, 1.0));
        s.duty_sampled = Some((p, lo, hi));
        s.duty = Some(p);
        s.duty_uncertainty = Some((hi - lo) / 2.0);
    }
    let why = "a counting probe sees no single cycle: it cannot observe per-cycle times";
    for f in [
        "high_min_ns",
        "low_min_ns",
        "period_jitter_rms_ns",
        "cycle_to_cycle_max_ns",
        "tie_rms_ns",
    ] {
        s.mark_unavailable(f, why);
    }
    if timebase_ppm > 0 {
        s.frequency_accuracy_hz = s.frequency_hz.map(|f| f * f64::from(timebase_ppm) * 1e-6);
    }
}

//! Window extremes: what a probe that times every cycle sends when it cannot send every
//! timestamp (each window's cycle count, shortest and longest high time, low time and period,
//! and their sums), and its threshold counts (the cycles whose phase was shorter than a
//! threshold the host set). Accumulated per block; the worst cycles they give are the worst of
//! every cycle, not of a sample.

use super::super::ingest::{Extremes, ThresholdCount};
use super::acc::{ClockAcc, ShortRun};
use super::config::K;
use super::figures::{ClockSnapshot, ShortPhaseEvent, ThresholdViolations};
use super::state::ClockState;

/// Short phases listed per session.
const MAX_SHORT_EVENTS: usize = 200;

impl ClockState {
    /// One window's extremes (ticks on the engine timeline).
    pub fn extremes_window(&mut self, w: &Extremes) {
        if self.acc.is_none() {
            if self.refs.is_none() {
                let p = if w.cycles > 0 {
                    (w.high_sum.saturating_add(w.low_sum) / u64::from(w.cycles)).clamp(1, 1 << 40)
                        as i64
                } else {
                    1
                };
                self.refs = Some((p, (p / 2).max(1), (p - p / 2).max(1)));
            }
            self.acc = self.empty_acc();
        }
        let q = self.tick_ns;
        let a = self.acc.as_mut().expect("block exists");
        let e = &mut a.ext;
        e.windows += 1;
        e.covered = e.covered.saturating_add(w.end_tick - w.start_tick);
        e.span = (e.span.0.min(w.start_tick), e.span.1.max(w.end_tick));
        if w.cycles == 0 {
            return;
        }
        if w.high.0 < e.high.0 {
            e.high_min_at = w.start_tick;
        }
        if w.low.0 < e.low.0 {
            e.low_min_at = w.start_tick;
        }
        e.high = (e.high.0.min(w.high.0), e.high.1.max(w.high.1));
        e.low = (e.low.0.min(w.low.0), e.low.1.max(w.low.1));
        e.period = (e.period.0.min(w.period.0), e.period.1.max(w.period.1));
        for (r, (lo, hi)) in e.range.iter_mut().zip([w.period, w.high, w.low]) {
            *r = (*r).max(hi - lo);
        }
        e.cycles += u64::from(w.cycles);
        e.high_sum = e.high_sum.saturating_add(w.high_sum);
        e.low_sum = e.low_sum.saturating_add(w.low_sum);
        // each window is a short run of its own (failure onsets, the time-resolved series)
        let n = f64::from(w.cycles);
        let mean_p = (w.high_sum as f64 + w.low_sum as f64) / n;
        let run = ShortRun {
            end_s: w.end_tick as f64 * q * 1e-9,
            cycles: u64::from(w.cycles),
            frequency_hz: 1e9 / (mean_p * q),
            duty: w.high_sum as f64 / n / mean_p,
            high_min_ns: f64::from(w.high.0) * q,
            low_min_ns: f64::from(w.low.0) * q,
        };
        self.runs = [self.runs[1], Some(run)];
    }

    /// One window's threshold counts (ticks on the engine timeline).
    pub fn threshold_window(&mut self, v: &ThresholdCount) {
        if self.acc.is_none() {
            if self.refs.is_none() {
                self.refs = Some((2, 1, 1));
            }
            self.acc = self.empty_acc();
        }
        let q = self.tick_ns;
        let a = self.acc.as_mut().expect("block exists");
        let e = &mut a.ext;
        e.counted_windows += 1;
        e.thresholds = (v.high_threshold, v.low_threshold);
        e.high_short += u64::from(v.high_short);
        e.low_short += u64::from(v.low_short);
        for &(tick, len, high) in &v.stamps[..usize::from(v.stamp_count)] {
            if self.short_events.len() >= MAX_SHORT_EVENTS {
                break;
            }
            self.short_events.push(ShortPhaseEvent {
                at_s: tick as f64 * q * 1e-9,
                phase: if high { "high" } else { "low" },
                length_ns: f64::from(len) * q,
            });
        }
    }
}

/// Whether a block holds window extremes and no stamped cycle.
pub(super) fn extremes_only(a: &ClockAcc) -> bool {
    a.period.n == 0 && a.ext.windows > 0
}

/// The threshold counts of a block (None when the probe counted none).
pub(super) fn violations(a: &ClockAcc, state: &ClockState) -> Option<ThresholdViolations> {
    let e = &a.ext;
    (e.counted_windows > 0).then(|| {
        let q = state.tick_ns;
        let ns = |t: u32| (t > 0).then(|| f64::from(t) * q);
        ThresholdViolations {
            high_threshold_ns: ns(e.thresholds.0),
            low_threshold_ns: ns(e.thresholds.1),
            high_short: e.high_short,
            low_short: e.low_short,
            windows: e.counted_windows,
            first: state.short_events.clone(),
        }
    })
}

/// The figures of a block of window extremes: the worst high time, low time and period of
/// every cycle (± one tick), the means from the sums, the frequency over the windows' cycles.
///
/// Uncertainty: the periods join end to end, so their sum spans the windows to ± one tick at
/// each of its `windows` breaks (±1 tick per window, uniform, in quadrature); the mean period
/// of N cycles differs from the clock's long-run one by σ/√N, σ bounded by half the largest
/// range of a window (Popoviciu's inequality on variances, σ² ≤ (max − min)²/4). The mean high
/// time carries half a tick of quantisation that need not average (a clock commensurate with
/// the tick) and its own σ/√N, bounded the same way.
pub(super) fn extremes_figures(s: &mut ClockSnapshot, a: &ClockAcc, timebase_ppm: u16) {
    let q = s.resolution_ns;
    let e = &a.ext;
    s.method = "window extremes".into();
    s.observation = "window-extremes".into();
    s.coverage = e.coverage();
    s.cycles = e.cycles;
    if e.cycles == 0 {
        s.mark_unavailable("all", "no complete clock cycle yet");
        return;
    }
    let n = e.cycles as f64;
    let total = e.high_sum as f64 + e.low_sum as f64;
    let mean_p = total / n;
    let mean_ns = mean_p * q;
    let f = 1e9 / mean_ns;
    s.frequency_hz = Some(f);
    s.period_mean_ns = Some(mean_ns);
    s.period_min_ns = Some(f64::from(e.period.0) * q);
    s.period_max_ns = Some(f64::from(e.period.1) * q);
    s.period_jitter_pkpk_ns = Some(f64::from(e.period.1 - e.period.0) * q);
    let sigma_p = f64::from(e.range[0]) / 2.0;
    let quant = (e.windows as f64 / 3.0).sqrt() / n;
    let u_t = (quant * quant + sigma_p * sigma_p / n).sqrt();
    s.frequency_uncertainty_hz = Some(K * f * u_t / mean_p);
    if timebase_ppm > 0 {
        s.frequency_accuracy_hz = Some(f * f64::from(timebase_ppm) * 1e-6);
    }
    let at = |t: u64| t as f64 * q * 1e-9;
    let high_mean = e.high_sum as f64 / n;
    s.high_mean_ns = Some(high_mean * q);
    s.high_min_ns = Some(f64::from(e.high.0) * q);
    s.high_min_at_s = Some(at(e.high_min_at));
    s.high_max_ns = Some(f64::from(e.high.1) * q);
    s.low_mean_ns = Some(e.low_sum as f64 / n * q);
    s.low_min_ns = Some(f64::from(e.low.0) * q);
    s.low_min_at_s = Some(at(e.low_min_at));
    s.low_max_ns = Some(f64::from(e.low.1) * q);
    let duty = e.high_sum as f64 / total;
    s.duty = Some(duty);
    let sigma_h = f64::from(e.range[1]) / 2.0;
    let u_h = 0.5 + K * sigma_h / n.sqrt();
    s.duty_uncertainty = Some(u_h / mean_p + duty * K * u_t / mean_p);
    let why = "a probe of window extremes sends no single cycle's time: only each window's \
               extremes and sums";
    for fig in [
        "period_jitter_rms_ns",
        "cycle_to_cycle_max_ns",
        "tie_rms_ns",
    ] {
        s.mark_unavailable(fig, why);
    }
}

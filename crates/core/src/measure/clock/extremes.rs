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

/// A block with stamped cycles and window extremes (a probe that stamps what its link carries
/// and times every cycle): the worst high time, low time and period become the worst of every
/// cycle the windows timed, and the coverage and observation theirs; the statistics of single
/// cycles (jitter, TIE, histograms) stay those of the stamped cycles.
pub(super) fn merge_extremes(s: &mut ClockSnapshot, a: &ClockAcc) {
    let e = &a.ext;
    if e.windows == 0 || e.cycles == 0 {
        return;
    }
    let q = s.resolution_ns;
    let at = |t: u64| t as f64 * q * 1e-9;
    let ns = |t: u32| f64::from(t) * q;
    if s.high_min_ns.is_none_or(|v| ns(e.high.0) < v) {
        s.high_min_ns = Some(ns(e.high.0));
        s.high_min_at_s = Some(at(e.high_min_at));
        s.high_min_cycle = None;
    }
    if s.low_min_ns.is_none_or(|v| ns(e.low.0) < v) {
        s.low_min_ns = Some(ns(e.low.0));
        s.low_min_at_s = Some(at(e.low_min_at));
        s.low_min_cycle = None;
    }
    let max = |v: Option<f64>, t: u32| Some(v.map_or(ns(t), |v| v.max(ns(t))));
    let min = |v: Option<f64>, t: u32| Some(v.map_or(ns(t), |v| v.min(ns(t))));
    s.high_max_ns = max(s.high_max_ns, e.high.1);
    s.low_max_ns = max(s.low_max_ns, e.low.1);
    s.period_min_ns = min(s.period_min_ns, e.period.0);
    s.period_max_ns = max(s.period_max_ns, e.period.1);
    if let (Some(lo), Some(hi)) = (s.period_min_ns, s.period_max_ns) {
        s.period_jitter_pkpk_ns = Some(hi - lo);
    }
    s.cycles = s.cycles.max(e.cycles);
    s.coverage = e.coverage();
    s.observation = "window-extremes".into();
    s.method = format!("{} and window extremes", s.method);
}

#[cfg(test)]
mod tests {
    use super::super::config::ClockConfig;
    use super::super::snapshot::snapshot;
    use super::*;

    /// A steady clock of 100 ticks, high 50, stamped over `cycles` cycles from tick 1000.
    fn stamped(cycles: u64) -> ClockState {
        let mut st = ClockState::new(ClockConfig::default(), 8.0);
        let ticks: Vec<u64> = (0..=2 * cycles).map(|i| 1000 + 50 * i).collect();
        st.edges(&ticks, true);
        st
    }

    fn window(start: u64, cycles: u32, high: (u32, u32), low: (u32, u32)) -> Extremes {
        Extremes {
            channel: 0,
            lost_before: false,
            start_tick: start,
            end_tick: start + 100 * u64::from(cycles),
            cycles,
            high,
            low,
            period: (high.0 + low.0, high.1 + low.1),
            high_sum: 50 * u64::from(cycles),
            low_sum: 50 * u64::from(cycles),
        }
    }

    #[test]
    fn windows_beside_stamps_give_the_worst_of_every_cycle() {
        // the stamps saw 20 steady cycles; the windows timed 400, one high time of 37 ticks
        // and one low time of 44 among them (cycles the link could not carry)
        let mut st = stamped(20);
        let only_stamps = snapshot(0, "clk", st.acc.as_ref(), &st, 0, false, 3000);
        assert_eq!(only_stamps.high_min_ns, Some(50.0 * 8.0));
        st.extremes_window(&window(1000, 200, (37, 52), (48, 50)));
        st.extremes_window(&window(21_000, 200, (50, 50), (44, 63)));
        let s = snapshot(0, "clk", st.acc.as_ref(), &st, 0, false, 41_000);
        assert_eq!(s.high_min_ns, Some(37.0 * 8.0));
        assert_eq!(s.low_min_ns, Some(44.0 * 8.0));
        assert_eq!(s.high_max_ns, Some(52.0 * 8.0));
        assert_eq!(s.low_max_ns, Some(63.0 * 8.0));
        assert_eq!(s.period_min_ns, Some(85.0 * 8.0));
        assert_eq!(s.period_max_ns, Some(113.0 * 8.0));
        assert_eq!(s.low_min_at_s, Some(21_000.0 * 8.0e-9));
        assert_eq!(s.cycles, 400);
        assert_eq!(s.observation, "window-extremes");
        assert_eq!(s.coverage, Some(1.0));
        assert!(s.every_cycle_observed());
        // the single-cycle statistics stay the stamps'
        assert_eq!(s.period_jitter_n, only_stamps.period_jitter_n);
    }

    #[test]
    fn a_lost_window_shows_in_the_coverage_and_stamps_alone_are_unchanged() {
        let mut st = stamped(20);
        let before = snapshot(0, "clk", st.acc.as_ref(), &st, 0, false, 3000);
        // a window without cycles changes nothing it could not see
        st.extremes_window(&window(1000, 0, (0, 0), (0, 0)));
        let empty = snapshot(0, "clk", st.acc.as_ref(), &st, 0, false, 3000);
        assert_eq!(empty.high_min_ns, before.high_min_ns);
        assert_eq!(empty.observation, before.observation);
        // two windows with a lost one between: three quarters of the span covered
        let mut st = stamped(20);
        st.extremes_window(&window(1000, 200, (50, 50), (50, 50)));
        st.extremes_window(&window(41_000, 200, (50, 50), (50, 50)));
        let s = snapshot(0, "clk", st.acc.as_ref(), &st, 0, false, 61_000);
        assert_eq!(s.coverage, Some(40_000.0 / 60_000.0));
        assert!(!s.every_cycle_observed());
    }
}

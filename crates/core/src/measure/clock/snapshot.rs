//! The figures of one clock channel from a merged block, and the uncertainty model behind them
//! as small pure functions.
//!
//! Uncertainties are expanded with coverage factor [`K`] = 2.5 (about 99 % for normal errors),
//! so that at least 95 % holds although each uncertainty is itself estimated from the data.
//! Minimum/maximum times are bounds: a time between two stamps is known to ±1 tick.
//! Quantisation (Widrow, Kollár & Liu, IEEE Trans. Instrum. Meas. 45(2), 1996): q²/12 per
//! stamp and q²/6 per period at random phase; a steady clock commensurate with the tick gives
//! two period readings, σ = q·√(p(1−p)). `tests/measure_closed_loop.rs` is the model's
//! calibration.

use super::super::stats::{DevHistogram, IntStats};
use super::acc::ClockAcc;
use super::config::{BATCH, K, MIN_TIE_STRETCH};
use super::count::{counted_figures, counted_only};
use super::extremes::{extremes_figures, extremes_only, merge_extremes, violations};
use super::figures::{AllanPoint, ClockSnapshot, NCycle, Percentiles};
use super::state::ClockState;
use super::walk::coherent_quantisation_ticks;

/// A stream whose stamped cycles cover at least this share of the elapsed ones is continuous
/// (a dropped edge or a lost frame now and then does not make it sampled; common practice, no
/// source).
const CONTINUOUS: f64 = 0.99;

/// A mean phase shorter than this many ticks flags the duty (common practice, no source).
const SHORT_PHASE_TICKS: f64 = 2.0;

/// Figures of one channel from a merged block (and the session's Allan estimator); `now_tick`
/// is the probe's latest time (the end of the elapsed time when the cycles came in bursts).
pub fn snapshot(
    channel: u8,
    label: &str,
    acc: Option<&ClockAcc>,
    state: &ClockState,
    timebase_ppm: u16,
    with_allan: bool,
    now_tick: u64,
) -> ClockSnapshot {
    let q = state.tick_ns;
    let mut s = ClockSnapshot::empty(channel, label, q, state.cfg.tie_record);
    let Some(a) = acc else {
        s.mark_unavailable("all", "no complete clock cycle yet");
        return s;
    };
    s.edges = a.edges;
    s.count_windows = a.count_windows;
    s.counted_cycles = a.count_edges;
    s.glitches = a.glitches;
    s.stalls = a.stalls;
    s.cycles_set_aside = a.set_aside_cycles;
    s.violations = violations(a, state);
    if extremes_only(a) {
        extremes_figures(&mut s, a, timebase_ppm);
        return s;
    }
    if counted_only(a) {
        counted_figures(&mut s, a, timebase_ppm);
        s.observation = "count-windows".into();
        s.coverage = Some(0.0);
        return s;
    }
    s.cycles = a.period.n;
    s.coverage = a.coverage(now_tick);
    if s.coverage.is_some_and(|c| c < CONTINUOUS) {
        s.observation = "bursts".into();
    }
    if a.period.n > 0 {
        stamped_figures(&mut s, a, state, timebase_ppm);
    }
    merge_extremes(&mut s, a);
    if with_allan && let Some(al) = &state.allan {
        // the estimator's τ0 was set from the reference (first) period; the samples are
        // `allan_every` mean periods apart, so τ scales by mean / reference and the deviation
        // (a phase difference over τ) by the inverse
        let pref = state.refs.map_or(0, |r| r.0);
        let scale = match (a.period.mean(), pref) {
            (Some(m), p) if p > 0 && m > 0.0 => m / p as f64,
            _ => 1.0,
        };
        s.allan = al
            .points()
            .into_iter()
            .map(|(tau_s, adev, terms)| AllanPoint {
                tau_s: tau_s * scale,
                adev: adev / scale,
                terms,
            })
            .collect();
    }
    s
}

/// The figures of a block with at least one stamped period.
fn stamped_figures(s: &mut ClockSnapshot, a: &ClockAcc, state: &ClockState, timebase_ppm: u16) {
    let q = s.resolution_ns;
    let p = &a.period;
    let (mean_p, sp) = (p.mean().unwrap_or(0.0), p.std_sample().unwrap_or(0.0));
    let mean_ns = mean_p * q;
    s.period_mean_ns = Some(mean_ns);
    s.period_min_ns = Some(p.min as f64 * q);
    s.period_max_ns = Some(p.max as f64 * q);
    let f = 1e9 / mean_ns;
    s.frequency_hz = Some(f);
    let n = p.n as f64;
    let sp_ns = sp * q;
    let sigma_p2 = period_noise_var(sp_ns, a.batch.n, a.batch.std_sample(), q);
    let u_t = mean_period_uncertainty_ns(sigma_p2, n, a.runs.max(1) as f64, q);
    s.frequency_uncertainty_hz = Some(K * f * u_t / mean_ns);
    if timebase_ppm > 0 {
        s.frequency_accuracy_hz = Some(f * f64::from(timebase_ppm) * 1e-6);
    }
    s.period_jitter_rms_ns = Some(sp_ns);
    s.period_jitter_rms_pop_ns = p.std_pop().map(|v| v * q);
    s.period_jitter_n = p.n;
    s.period_jitter_pkpk_ns = Some((p.max - p.min) as f64 * q);
    let debiased = debiased_jitter_ns(sp_ns, q);
    let u_j = jitter_uncertainty_ns(sp_ns, debiased, n, q);
    s.period_jitter_debiased_ns = Some(debiased);
    // below resolution when the uncertainty covers zero (the estimate cannot tell the clock
    // from a jitter-free one)
    s.period_jitter_below_resolution = debiased <= u_j;
    s.period_jitter_uncertainty_ns = Some(u_j);
    let tick_s = q * 1e-9;
    if let Some(h) = PhaseTimes::of(&a.high, q, tick_s) {
        // quantisation that does not average: edges on few phases of the tick (a period that
        // is a ratio of small integers in ticks), smoothed only by jitter the spread shows
        // beyond any quantisation at a fixed phase (up to q²/2 of the period variance)
        // (a random walk of the phase, shown by the TIE, dithers as well)
        let (tie_ss, tie_n) = tie_sums(a, state);
        let tie_dither_ticks = if tie_n > 0 {
            ((tie_ss / tie_n as f64) - 0.25).max(0.0).sqrt()
        } else {
            0.0
        };
        let dither_ticks = dither_lower_bound_ticks(sp_ns, n, q).max(tie_dither_ticks);
        // this record's mean period (not the clock's long-run mean): each run's end stamps,
        // quantised and jittered, over the cycles
        let runs = a.runs.max(1) as f64;
        let delta_ticks = K * (runs * (1.0 / 6.0 + (sp_ns / q).powi(2))).sqrt() / n;
        let sys_ns = q * coherent_quantisation_ticks(mean_p, delta_ticks, n, dither_ticks);
        let u_h = mean_uncertainty_ns(&a.high, q, sys_ns);
        s.duty = Some(h.mean_ns / mean_ns);
        s.duty_uncertainty = Some(duty_uncertainty(h.mean_ns, u_h, mean_ns, u_t));
        let low_ns = mean_ns - h.mean_ns;
        if h.mean_ns.min(low_ns) < SHORT_PHASE_TICKS * q {
            // a phase of a tick or two: which stamps it falls between decides the reading; a
            // systematic error up to half a tick on the mean phase stays
            let u_short = duty_uncertainty(h.mean_ns, u_h.max(q / 2.0), mean_ns, u_t);
            s.duty_uncertainty = s.duty_uncertainty.map(|u| u.max(u_short));
            s.duty_note = Some(format!(
                "a phase is under {SHORT_PHASE_TICKS} ticks: the duty is only as good as the \
                 tick ({})",
                if h.mean_ns < low_ns { "high" } else { "low" }
            ));
        }
        (
            s.high_mean_ns,
            s.high_min_ns,
            s.high_max_ns,
            s.high_min_at_s,
            s.high_min_cycle,
        ) = h.fields();
    }
    if let Some(l) = PhaseTimes::of(&a.low, q, tick_s) {
        (
            s.low_mean_ns,
            s.low_min_ns,
            s.low_max_ns,
            s.low_min_at_s,
            s.low_min_cycle,
        ) = l.fields();
    }
    if a.c2c.n > 0 {
        s.cycle_to_cycle_rms_ns = a.c2c.rms_about_zero().map(|v| v * q);
        s.cycle_to_cycle_debiased_ns = s
            .cycle_to_cycle_rms_ns
            .map(|r| (r * r - q * q / 2.0).max(0.0).sqrt());
        if let (Some(r), Some(d)) = (s.cycle_to_cycle_rms_ns, s.cycle_to_cycle_debiased_ns) {
            // adjacent differences are correlated (lag one, −0.5): 2/3 as many independent
            // samples; quantisation q²/2 (three stamps); a steady clock reads up to one tick
            let n_eff = a.c2c.n as f64 / 1.5;
            let u = spread_uncertainty_ns(r, d, n_eff, q, 0.5, 1.0);
            s.cycle_to_cycle_uncertainty_ns = Some(u);
            s.cycle_to_cycle_below_resolution = d <= u;
        }
        s.cycle_to_cycle_max_ns =
            Some(a.c2c.max.unsigned_abs().max(a.c2c.min.unsigned_abs()) as f64 * q);
    }
    // TIE only where phase is known: each contiguous stretch against its own ideal clock,
    // pooled (the stretch still open counts whole)
    let (ss, n_tie) = tie_sums(a, state);
    if n_tie > 0 {
        s.tie_rms_ns = Some((ss / n_tie as f64).sqrt() * q);
    } else {
        s.mark_unavailable(
            "tie_rms_ns",
            &format!(
                "no contiguous stretch of {MIN_TIE_STRETCH} cycles or more: phase is not known \
                 across continuity breaks"
            ),
        );
    }
    if a.tie_rec_n > 0 {
        s.tie_pkpk_ns = Some(a.tie_rec_max_pkpk * q);
    } else {
        s.mark_unavailable(
            "tie_pkpk_ns",
            &format!(
                "no contiguous stretch of {} cycles (one TIE record)",
                state.cfg.tie_record
            ),
        );
    }
    let pref = state.refs.map_or(0, |r| r.0);
    s.n_cycle = n_cycle_figures(&a.ncycle, state.cfg.n_cycles, mean_p, sp, pref, q);
    s.period_percentiles = percentiles(&a.hist_period, q);
    s.high_percentiles = percentiles(&a.hist_high, q);
    s.low_percentiles = percentiles(&a.hist_low, q);
    let ns = |h: &DevHistogram| {
        h.buckets()
            .into_iter()
            .map(|(v, c)| (v as f64 * q, c))
            .collect::<Vec<_>>()
    };
    s.histograms = [ns(&a.hist_period), ns(&a.hist_high), ns(&a.hist_low)];
}

/// The pooled TIE residual sum of squares (ticks²) and its count: the closed stretches and the
/// one still open (counted whole).
fn tie_sums(a: &ClockAcc, state: &ClockState) -> (f64, u64) {
    let (mut ss, mut n) = a.tie_pool;
    if let Some((s2, n2)) = state.open_stretch_tie() {
        (ss, n) = (ss + s2, n + n2);
    }
    (ss, n)
}

/// Mean, extremes and the worst cycle of one phase (high or low times), ns and s.
struct PhaseTimes {
    mean_ns: f64,
    min_ns: f64,
    max_ns: f64,
    min_at_s: f64,
    min_cycle: u64,
}

impl PhaseTimes {
    fn of(st: &IntStats, q: f64, tick_s: f64) -> Option<PhaseTimes> {
        Some(PhaseTimes {
            mean_ns: st.mean()? * q,
            min_ns: st.min as f64 * q,
            max_ns: st.max as f64 * q,
            min_at_s: st.min_at.0 as f64 * tick_s,
            min_cycle: st.min_at.1,
        })
    }

    /// (mean, min, max, min at, min cycle), as the snapshot's fields hold them.
    #[allow(clippy::type_complexity)]
    fn fields(
        &self,
    ) -> (
        Option<f64>,
        Option<f64>,
        Option<f64>,
        Option<f64>,
        Option<u64>,
    ) {
        (
            Some(self.mean_ns),
            Some(self.min_ns),
            Some(self.max_ns),
            Some(self.min_at_s),
            Some(self.min_cycle),
        )
    }
}

/// The variance of the period noise, ns²: from batch means when there are at least 8 batches
/// (it shows even below one tick; at least the spread of that estimate, which bounds what the
/// batches cannot resolve), else from the period spread less quantisation (q²/6), kept
/// at least at the quantisation floor when the spread is that of quantisation alone.
fn period_noise_var(sp_ns: f64, batches: u64, batch_std: Option<f64>, q: f64) -> f64 {
    let floor = q / 6f64.sqrt();
    if batches >= 8 {
        // the batch variance less quantisation; a period noise the batches cannot resolve (below
        // the estimate's own spread, √(2/(m − 1)) of the batch variance) is bounded by it
        let vb = batch_std.unwrap_or(0.0) * q;
        let unresolved = vb * vb * (2.0 / (batches as f64 - 1.0)).sqrt();
        ((vb * vb - q * q / 6.0).max(unresolved) / f64::from(BATCH)).max(0.0)
    } else {
        (sp_ns * sp_ns - q * q / 6.0)
            .max(0.0)
            .max(if sp_ns * sp_ns < 2.0 * q * q / 6.0 {
                floor * floor
            } else {
                0.0
            })
    }
}

/// Standard uncertainty of the mean period, ns: the accumulated period noise σ_p²/N plus the
/// quantisation of each run's two end stamps (q²/6 per run) over N².
fn mean_period_uncertainty_ns(sigma_p2: f64, n: f64, runs: f64, q: f64) -> f64 {
    (sigma_p2 / n + runs * q * q / 6.0 / (n * n)).sqrt()
}

/// The de-biased period jitter √(s² − q²/6), ns (0 when quantisation explains all of it).
fn debiased_jitter_ns(sp_ns: f64, q: f64) -> f64 {
    (sp_ns * sp_ns - q * q / 6.0).max(0.0).sqrt()
}

/// Expanded uncertainty of the period jitter estimate, ns (see [`spread_uncertainty_ns`]:
/// q²/6 of quantisation, a steady clock reads up to q/2).
fn jitter_uncertainty_ns(sp_ns: f64, debiased: f64, n: f64, q: f64) -> f64 {
    spread_uncertainty_ns(sp_ns, debiased, n, q, 1.0 / 6.0, 0.5)
}

/// Expanded uncertainty of a spread de-biased by `qvar`·q² of quantisation, ns: the chi-square
/// spread of a standard deviation over `n` independent samples, plus the error of subtracting
/// the quantisation: at most about qvar·q²/(4σ), and vanishing as exp(−2π²σ²/q²) once the jitter
/// dithers the quantiser (the Gaussian characteristic function at 2π/q; Widrow, Kollár & Liu
/// 1996). A steady clock commensurate with the tick reads anything up to `steady_ticks`·q: a
/// spread quantisation alone could make covers zero.
fn spread_uncertainty_ns(
    s_ns: f64,
    debiased: f64,
    n: f64,
    q: f64,
    qvar: f64,
    steady_ticks: f64,
) -> f64 {
    let stat = s_ns / (2.0 * (n - 1.0).max(1.0)).sqrt();
    let model = if debiased > 0.0 {
        (qvar * q * q / 4.0 / debiased)
            * (-2.0 * std::f64::consts::PI.powi(2) * (debiased / q).powi(2)).exp()
    } else {
        q * qvar.sqrt()
    };
    let u = K * (stat * stat + model * model).sqrt();
    if s_ns <= steady_ticks * q + K * stat {
        u.max(debiased).max(s_ns - debiased)
    } else {
        u
    }
}

/// A lower bound of each edge's random jitter, ticks RMS: the period spread less its
/// statistical uncertainty and less the most that quantisation at a fixed phase can add (q²/2),
/// shared by the period's two edges.
fn dither_lower_bound_ticks(sp_ns: f64, n: f64, q: f64) -> f64 {
    let sp_low = sp_ns * (1.0 - K / (2.0 * (n - 1.0).max(1.0)).sqrt());
    ((sp_low.max(0.0).powi(2) - q * q / 2.0).max(0.0) / 2.0).sqrt() / q
}

/// Standard uncertainty of a mean phase time, ns: its spread over √n with the systematic term.
fn mean_uncertainty_ns(st: &IntStats, q: f64, sys_ns: f64) -> f64 {
    let sd = st.std_sample().unwrap_or(0.0) * q;
    (sd * sd / st.n as f64 + sys_ns * sys_ns).sqrt()
}

/// Expanded uncertainty of the duty mean high / mean period from the two means' uncertainties.
fn duty_uncertainty(high_ns: f64, u_high_ns: f64, period_ns: f64, u_period_ns: f64) -> f64 {
    K * ((u_high_ns / period_ns).powi(2)
        + (high_ns * u_period_ns / (period_ns * period_ns)).powi(2))
    .sqrt()
}

/// N-cycle errors against N·(mean period) rather than N·reference (the sums hold the latter);
/// `sp_ticks` is the period spread, which with the N-cycle spread tells how much of it
/// accumulates (independent periods) and how much does not (white phase noise, quantisation).
fn n_cycle_figures(
    sums: &[IntStats; 2],
    ns: [u32; 2],
    mean_p: f64,
    sp_ticks: f64,
    pref: i64,
    q: f64,
) -> Vec<NCycle> {
    let mut out = Vec::new();
    for (st, n) in sums.iter().zip(ns) {
        if st.n > 1 {
            let shift = (mean_p - pref as f64) * f64::from(n);
            let m = st.mean().unwrap_or(0.0);
            let sd = st.std_pop().unwrap_or(0.0);
            let max_abs = ((st.max as f64 - shift).abs()).max((st.min as f64 - shift).abs());
            let rms = (sd * sd + (m - shift).powi(2)).sqrt();
            let debiased_ns = ((rms * rms - 1.0 / 6.0).max(0.0)).sqrt() * q;
            // overlapping spans are correlated; two stamps (q²/6); a steady clock reads up to
            // half a tick
            let n_eff = st.n as f64 / n_cycle_correlation_sum(rms * rms, sp_ticks, n);
            let u = spread_uncertainty_ns(rms * q, debiased_ns, n_eff, q, 1.0 / 6.0, 0.5);
            out.push(NCycle {
                n,
                rms_ns: rms * q,
                max_abs_ns: max_abs * q,
                debiased_ns,
                uncertainty_ns: u,
                below_resolution: debiased_ns <= u,
            });
        }
    }
    out
}

fn percentiles(h: &DevHistogram, q: f64) -> Option<Percentiles> {
    let at = |p: f64| h.quantile(p).map(|v| v as f64 * q);
    Some(Percentiles {
        p0_1: at(0.001)?,
        p1: at(0.01)?,
        p50: at(0.5)?,
        p99: at(0.99)?,
        p99_9: at(0.999)?,
    })
}

/// Σ ρ_j² over all lags of the overlapping N-cycle errors, the factor by which they hold fewer
/// independent samples than their count (the variance of a sample variance, Bartlett 1946).
/// `var_n` (N-cycle, ticks²) and `sp_ticks` split the spread into an accumulating part
/// (independent periods: N·σ², errors overlapping by (N − j)/N at lag j) and a part that does
/// not accumulate (white phase noise and the stamps' quantisation: −½ at lag N).
fn n_cycle_correlation_sum(var_n: f64, sp_ticks: f64, n: u32) -> f64 {
    let nf = f64::from(n.max(1));
    if n <= 1 {
        return 1.0;
    }
    let v_p = (sp_ticks * sp_ticks - 1.0 / 6.0).max(0.0);
    let v_n = (var_n - 1.0 / 6.0).max(0.0);
    let rw = ((v_n - v_p) / (nf - 1.0)).max(0.0) * nf;
    let w = if var_n > 0.0 {
        (rw / var_n).min(1.0)
    } else {
        0.0
    };
    // Σ_{j=1}^{N−1} ((N − j)/N)² = (N − 1)(2N − 1)/(6N)
    let overlap = (nf - 1.0) * (2.0 * nf - 1.0) / (6.0 * nf);
    1.0 + 2.0 * w * w * overlap + 2.0 * (0.5 * (1.0 - w)).powi(2)
}

#[cfg(test)]
mod tests {
    use super::n_cycle_correlation_sum;

    /// Σ ρ² of a moving sum of N white terms, ρ_j = (N − j)/N (the autocorrelation of an
    /// MA(N − 1) process with equal weights; Box & Jenkins, from memory), summed directly.
    fn moving_sum_reference(n: u32) -> f64 {
        let nf = f64::from(n);
        1.0 + 2.0
            * (1..n)
                .map(|j| ((nf - f64::from(j)) / nf).powi(2))
                .sum::<f64>()
    }

    #[test]
    fn accumulating_spread_matches_the_moving_sum_autocorrelation() {
        for n in [2u32, 3, 8, 32, 100] {
            // periods independent with σ = 10 ticks and no stamp noise beyond the quantisation
            let sp = (100.0_f64 + 1.0 / 6.0).sqrt();
            let var_n = f64::from(n) * 100.0 + 1.0 / 6.0;
            let got = n_cycle_correlation_sum(var_n, sp, n);
            let want = moving_sum_reference(n);
            assert!((got - want).abs() < 0.01 * want, "N {n}: {got} vs {want}");
        }
    }

    #[test]
    fn white_phase_noise_has_one_correlated_lag() {
        // edges jitter independently: every span is a difference of two, ρ = −½ at lag N only
        // (first difference of white noise, MA(1); textbook, from memory): Σ ρ² = 1.5
        for n in [2u32, 8, 64] {
            let got = n_cycle_correlation_sum(8.0, 8.0_f64.sqrt(), n);
            assert!((got - 1.5).abs() < 1e-9, "N {n}: {got}");
        }
        assert_eq!(n_cycle_correlation_sum(5.0, 2.0, 1), 1.0);
    }
}

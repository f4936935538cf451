//! The clock's accumulators: one block's mergeable statistics ([`ClockAcc`]), the TIE fit's
//! least-squares sums ([`FitSums`]) and the sums of a short run of cycles ([`RunAcc`]).

use serde::Serialize;

use super::super::stats::{DevHistogram, IntStats};
use super::config::BATCH;

/// Least-squares sums for the TIE fit: u_k = t_k − t0 − k·T_ref over rising edges k.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FitSums {
    pub(super) n: i128,
    pub(super) sk: i128,
    pub(super) skk: i128,
    pub(super) su: i128,
    pub(super) sku: i128,
    pub(super) suu: i128,
    /// A term beyond the plain-arithmetic bounds was added (sums saturate from then on).
    pub(super) big: bool,
}

/// The fit's plain-arithmetic bound: while every term has k and |u| below it and n stays below
/// it, no sum can pass 2^120.
pub(super) const FIT_LIM: i128 = 1 << 40;

impl FitSums {
    #[inline]
    pub(super) fn add(&mut self, k: i64, u: i64) {
        // plain arithmetic (the usual case) within the bounds; one larger term switches this
        // fit to saturating for good
        const LIM: i64 = FIT_LIM as i64;
        if !self.big && (0..LIM).contains(&k) && (-LIM..LIM).contains(&u) && self.n < FIT_LIM {
            let (k, u) = (i128::from(k), i128::from(u));
            self.n += 1;
            self.sk += k;
            self.skk += k * k;
            self.su += u;
            self.sku += k * u;
            self.suu += u * u;
            return;
        }
        self.big = true;
        let (k, u) = (i128::from(k), i128::from(u));
        // saturating: only an absurd probe gets near the limits, and then the TIE is garbage anyway
        self.n += 1;
        self.sk = self.sk.saturating_add(k);
        self.skk = self.skk.saturating_add(k.saturating_mul(k));
        self.su = self.su.saturating_add(u);
        self.sku = self.sku.saturating_add(k.saturating_mul(u));
        self.suu = self.suu.saturating_add(u.saturating_mul(u));
    }

    /// Sum of squared residuals (ticks²) against the least-squares line: (Sxx·Syy − Sxy²) /
    /// (n·Sxx) from the centred sums, the numerator exactly in 256-bit integers (a clean clock's
    /// residual is a tiny difference of two huge products: floating point loses it). None below
    /// three points.
    pub(super) fn residual_ss(&self) -> Option<f64> {
        if self.n < 3 {
            return None;
        }
        let n = self.n;
        let centred = |sab: i128, sa: i128, sb: i128| {
            n.checked_mul(sab)
                .and_then(|x| sa.checked_mul(sb).and_then(|y| x.checked_sub(y)))
        };
        match (
            centred(self.skk, self.sk, self.sk),
            centred(self.sku, self.sk, self.su),
            centred(self.suu, self.su, self.su),
        ) {
            (Some(sxx), Some(sxy), Some(syy)) if sxx > 0 => {
                let d = wide_sub(wide_mul(sxx.unsigned_abs(), syy.unsigned_abs()), {
                    let a = sxy.unsigned_abs();
                    wide_mul(a, a)
                });
                Some((wide_f64(d) / (n as f64 * sxx as f64)).max(0.0))
            }
            _ => {
                // beyond i128 (an absurd probe): floating point
                let nf = n as f64;
                let c = |sab: i128, sa: i128, sb: i128| nf * sab as f64 - sa as f64 * sb as f64;
                let sxx = c(self.skk, self.sk, self.sk);
                let sxy = c(self.sku, self.sk, self.su);
                let syy = c(self.suu, self.su, self.su);
                (sxx > 0.0).then(|| ((syy - sxy * sxy / sxx) / nf).max(0.0))
            }
        }
    }

    /// RMS residual (ticks) against the least-squares line.
    #[cfg(test)]
    pub(super) fn residual_rms(&self) -> Option<f64> {
        Some((self.residual_ss()? / self.n as f64).sqrt())
    }
}

/// a·b as 256 bits (high, low).
fn wide_mul(a: u128, b: u128) -> (u128, u128) {
    let m = u128::from(u64::MAX);
    let (a1, a0, b1, b0) = (a >> 64, a & m, b >> 64, b & m);
    let (p00, p01, p10, p11) = (a0 * b0, a0 * b1, a1 * b0, a1 * b1);
    let mid = (p00 >> 64) + (p01 & m) + (p10 & m);
    let lo = (p00 & m) | (mid << 64);
    let hi = p11 + (p01 >> 64) + (p10 >> 64) + (mid >> 64);
    (hi, lo)
}

/// a − b for 256-bit values, 0 when b > a.
fn wide_sub(a: (u128, u128), b: (u128, u128)) -> (u128, u128) {
    if b > a {
        return (0, 0);
    }
    let (lo, borrow) = a.1.overflowing_sub(b.1);
    (a.0 - b.0 - u128::from(borrow), lo)
}

fn wide_f64((hi, lo): (u128, u128)) -> f64 {
    hi as f64 * 2f64.powi(128) + lo as f64
}

/// One block's worth of clock statistics (mergeable).
#[derive(Clone, Debug, PartialEq)]
pub struct ClockAcc {
    /// Rising-to-rising periods (ticks).
    pub period: IntStats,
    /// High times.
    pub high: IntStats,
    /// Low times.
    pub low: IntStats,
    /// Adjacent period differences.
    pub c2c: IntStats,
    /// Histograms.
    pub hist_period: DevHistogram,
    /// High-time histogram.
    pub hist_high: DevHistogram,
    /// Low-time histogram.
    pub hist_low: DevHistogram,
    /// Squared TIE residuals (ticks²) and rises of the contiguous stretches that ended in this
    /// block, each against its own least-squares clock (phase is not known across a break).
    pub(super) tie_pool: (f64, u64),
    pub(super) tie_rec_max_pkpk: f64,
    pub(super) tie_rec_ss: f64,
    pub(super) tie_rec_n: u64,
    pub(super) ncycle: [IntStats; 2],
    /// Sums of `BATCH` contiguous periods (batch means for the mean period's uncertainty).
    pub(super) batch: IntStats,
    /// Edges seen (including glitch edges).
    pub edges: u64,
    /// Glitches.
    pub glitches: u64,
    /// Stalls.
    pub stalls: u64,
    /// Cycles left out of the figures: judged with typical values that a stall or slow start
    /// inside the very first period seeded, before the engine seeded again.
    pub set_aside_cycles: u64,
    /// Contiguous runs of periods (each gap, loss or glitch starts a new one).
    pub runs: u64,
    /// First and last tick of the stamped periods (the elapsed time they lie in).
    pub(super) span: (u64, u64),
    /// Ticks the clock was seen stopped (stall gaps): elapsed, but no cycle was missed.
    pub(super) idle_ticks: u64,
    // count windows (when the probe only counts)
    pub(super) count_edges: u64,
    pub(super) count_ticks: u64,
    pub(super) count_windows: u64,
    pub(super) count_reciprocal: bool,
    pub(super) samples: u64,
    pub(super) samples_high: u64,
    /// Window extremes (when the probe times every cycle and sends extremes per window).
    pub(super) ext: ExtAcc,
}

/// The merged extremes of a probe's windows (ticks): every cycle's worst, sums for the means,
/// the windows' coverage and the threshold counts.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct ExtAcc {
    pub(super) windows: u64,
    pub(super) cycles: u64,
    pub(super) high: (u32, u32),
    pub(super) low: (u32, u32),
    pub(super) period: (u32, u32),
    /// Largest range (max − min) of the period, high and low time within one window.
    pub(super) range: [u32; 3],
    pub(super) high_sum: u64,
    pub(super) low_sum: u64,
    /// Ticks the windows received cover, and the first start and last end among them.
    pub(super) covered: u64,
    pub(super) span: (u64, u64),
    /// Start of the window with the shortest high and low time.
    pub(super) high_min_at: u64,
    pub(super) low_min_at: u64,
    /// Threshold counts: windows counted, thresholds in force (the latest), short phases.
    pub(super) counted_windows: u64,
    pub(super) thresholds: (u32, u32),
    pub(super) high_short: u64,
    pub(super) low_short: u64,
}

impl Default for ExtAcc {
    fn default() -> Self {
        ExtAcc {
            windows: 0,
            cycles: 0,
            high: (u32::MAX, 0),
            low: (u32::MAX, 0),
            period: (u32::MAX, 0),
            range: [0; 3],
            high_sum: 0,
            low_sum: 0,
            covered: 0,
            span: (u64::MAX, 0),
            high_min_at: 0,
            low_min_at: 0,
            counted_windows: 0,
            thresholds: (0, 0),
            high_short: 0,
            low_short: 0,
        }
    }
}

impl ExtAcc {
    /// Fold a later block's extremes into these.
    pub(super) fn merge(&mut self, o: &ExtAcc) {
        if o.high.0 < self.high.0 {
            self.high_min_at = o.high_min_at;
        }
        if o.low.0 < self.low.0 {
            self.low_min_at = o.low_min_at;
        }
        let mm = |a: (u32, u32), b: (u32, u32)| (a.0.min(b.0), a.1.max(b.1));
        self.high = mm(self.high, o.high);
        self.low = mm(self.low, o.low);
        self.period = mm(self.period, o.period);
        for i in 0..3 {
            self.range[i] = self.range[i].max(o.range[i]);
        }
        self.windows += o.windows;
        self.cycles += o.cycles;
        self.high_sum = self.high_sum.saturating_add(o.high_sum);
        self.low_sum = self.low_sum.saturating_add(o.low_sum);
        self.covered = self.covered.saturating_add(o.covered);
        self.span = (self.span.0.min(o.span.0), self.span.1.max(o.span.1));
        self.counted_windows += o.counted_windows;
        if o.counted_windows > 0 {
            self.thresholds = o.thresholds;
        }
        self.high_short += o.high_short;
        self.low_short += o.low_short;
    }

    /// Share of the elapsed time the windows received cover (1.0 when every window arrived).
    pub(super) fn coverage(&self) -> Option<f64> {
        let elapsed = self.span.1.checked_sub(self.span.0)?;
        (elapsed > 0).then(|| (self.covered as f64 / elapsed as f64).clamp(0.0, 1.0))
    }
}

impl ClockAcc {
    /// An empty block whose sums are taken about these reference values (ticks).
    pub(super) fn new(origin: i64, ref_high: i64, ref_low: i64) -> ClockAcc {
        ClockAcc {
            period: IntStats::new(origin),
            high: IntStats::new(ref_high),
            low: IntStats::new(ref_low),
            c2c: IntStats::new(0),
            hist_period: DevHistogram::new(origin),
            hist_high: DevHistogram::new(ref_high),
            hist_low: DevHistogram::new(ref_low),
            tie_pool: (0.0, 0),
            tie_rec_max_pkpk: 0.0,
            tie_rec_ss: 0.0,
            tie_rec_n: 0,
            ncycle: [IntStats::new(0), IntStats::new(0)],
            batch: IntStats::new(origin * BATCH as i64),
            edges: 0,
            glitches: 0,
            stalls: 0,
            set_aside_cycles: 0,
            runs: 0,
            span: (u64::MAX, 0),
            idle_ticks: 0,
            count_edges: 0,
            count_ticks: 0,
            count_windows: 0,
            count_reciprocal: false,
            samples: 0,
            samples_high: 0,
            ext: ExtAcc::default(),
        }
    }

    /// A finished TIE record's (peak to peak, sum of squared residuals, edges), in ticks.
    #[inline]
    pub(super) fn add_tie_record(&mut self, (pkpk, ss, n): (f64, f64, u64)) {
        self.tie_rec_max_pkpk = self.tie_rec_max_pkpk.max(pkpk);
        self.tie_rec_ss += ss;
        self.tie_rec_n += n;
    }

    /// Stamped periods from tick `from` to tick `to` (widens the elapsed span).
    #[inline]
    pub(super) fn cover(&mut self, from: u64, to: u64) {
        self.span = (self.span.0.min(from), self.span.1.max(to));
    }

    /// The share of elapsed cycles that were stamped: stamped time over the span the periods
    /// lie in less the time the clock was seen stopped (None before a period). With more than
    /// one run (bursts, losses) the span runs on to `now_tick`: the cycles after the last
    /// burst elapsed too.
    pub(super) fn coverage(&self, now_tick: u64) -> Option<f64> {
        let from = self.span.0;
        let to = if self.runs > 1 {
            self.span.1.max(now_tick)
        } else {
            self.span.1
        };
        let elapsed = to.checked_sub(from)?.saturating_sub(self.idle_ticks);
        let stamped = self.period.mean()? * self.period.n as f64;
        (elapsed > 0).then(|| (stamped / elapsed as f64).clamp(0.0, 1.0))
    }

    /// Fold a later block into this one.
    pub fn merge(&mut self, o: &ClockAcc) {
        self.period.merge(&o.period);
        self.high.merge(&o.high);
        self.low.merge(&o.low);
        self.c2c.merge(&o.c2c);
        self.hist_period.merge(&o.hist_period);
        self.hist_high.merge(&o.hist_high);
        self.hist_low.merge(&o.hist_low);
        self.tie_pool = (
            self.tie_pool.0 + o.tie_pool.0,
            self.tie_pool.1 + o.tie_pool.1,
        );
        self.add_tie_record((o.tie_rec_max_pkpk, o.tie_rec_ss, o.tie_rec_n));
        for i in 0..2 {
            self.ncycle[i].merge(&o.ncycle[i]);
        }
        self.batch.merge(&o.batch);
        self.edges += o.edges;
        self.glitches += o.glitches;
        self.stalls += o.stalls;
        self.set_aside_cycles += o.set_aside_cycles;
        self.runs += o.runs;
        self.cover(o.span.0, o.span.1);
        self.idle_ticks += o.idle_ticks;
        self.count_edges += o.count_edges;
        self.count_ticks += o.count_ticks;
        self.count_windows += o.count_windows;
        self.count_reciprocal |= o.count_reciprocal;
        self.samples += o.samples;
        self.samples_high += o.samples_high;
        self.ext.merge(&o.ext);
    }
}

/// Figures of a short stretch of cycles (about 20 ms, or one burst), for failure onsets.
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct ShortRun {
    /// Probe time of its last cycle, s.
    pub end_s: f64,
    /// Cycles in it.
    pub cycles: u64,
    /// Mean frequency, Hz.
    pub frequency_hz: f64,
    /// Duty (mean high / mean period).
    pub duty: f64,
    /// Shortest high time, ns.
    pub high_min_ns: f64,
    /// Shortest low time, ns.
    pub low_min_ns: f64,
}

/// Sums of the short run being taken (ticks).
#[derive(Clone, Copy, Debug, Default)]
pub(super) struct RunAcc {
    pub(super) start: u64,
    pub(super) last: u64,
    pub(super) n: u64,
    pub(super) sum_p: u64,
    pub(super) sum_h: u64,
    pub(super) nh: u64,
    pub(super) min_h: u64,
    pub(super) min_l: u64,
}

impl RunAcc {
    /// An empty run whose minimums are still to be found.
    pub(super) fn fresh() -> RunAcc {
        RunAcc {
            min_h: u64::MAX,
            min_l: u64::MAX,
            ..RunAcc::default()
        }
    }

    /// Its figures with a tick of `q` ns (None while it has no period).
    pub(super) fn figures(&self, q: f64) -> Option<ShortRun> {
        (self.n > 0).then(|| {
            let mean_p = self.sum_p as f64 / self.n as f64;
            ShortRun {
                end_s: self.last as f64 * q * 1e-9,
                cycles: self.n,
                frequency_hz: 1e9 / (mean_p * q),
                duty: if self.nh > 0 {
                    self.sum_h as f64 / self.nh as f64 / mean_p
                } else {
                    0.0
                },
                high_min_ns: if self.nh > 0 {
                    self.min_h as f64 * q
                } else {
                    f64::NAN
                },
                low_min_ns: if self.min_l < u64::MAX {
                    self.min_l as f64 * q
                } else {
                    f64::NAN
                },
            }
        })
    }
}

/// Add `n` samples summing to `sum` to a refresh segment's (sum, count).
#[inline]
pub(super) fn seg_add(seg: &mut (u64, u64), sum: u64, n: u64) {
    seg.0 = seg.0.saturating_add(sum);
    seg.1 += n;
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The plain-arithmetic path of the fit sums gives exactly what the saturating path gives
    /// wherever neither saturates, and a huge term switches to saturating without a panic.
    #[test]
    fn fit_sums_fast_path_equals_saturating_path() {
        let mut fast = FitSums::default();
        let mut slow = FitSums {
            big: true,
            ..FitSums::default()
        };
        let mut x: u64 = 0x9E37_79B9_7F4A_7C15;
        for k in 0..10_000i64 {
            x ^= x << 13;
            x ^= x >> 7;
            x ^= x << 17;
            let u = (x % 2_000_001) as i64 - 1_000_000;
            fast.add(k, u);
            slow.add(k, u);
        }
        assert!(!fast.big);
        assert_eq!(
            (fast.n, fast.sk, fast.skk, fast.su, fast.sku, fast.suu),
            (slow.n, slow.sk, slow.skk, slow.su, slow.sku, slow.suu)
        );
        assert_eq!(fast.residual_rms(), slow.residual_rms());
        // a clean clock: residuals of ±1 about a steep line, where the floating-point
        // difference of the centred sums cancels (exact value from the residuals themselves)
        let mut f = FitSums::default();
        let mut ss = 0.0;
        for k in 0..1_000_000i64 {
            let r = [1i64, -1][k as usize % 2];
            f.add(k, 1_000 * k + r);
            ss += 1.0;
        }
        let want = ss / 1e6; // the line is exact: ±1 about 1000·k (mean 0, no slope left)
        let got = f.residual_rms().unwrap().powi(2);
        assert!((got - want).abs() < 1e-9, "{got}");
        fast.add(i64::MAX / 4, i64::MAX / 4);
        fast.add(i64::MAX / 4, i64::MIN / 4);
        assert!(fast.big && fast.suu > 0);
    }
}

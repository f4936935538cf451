//! Clock statistics of one edge channel: streaming over edge timestamps (or count windows),
//! mergeable per block, with every figure's uncertainty derived from the probe's tick.
//!
//! Uncertainties are expanded with coverage factor [`K`] = 2.5 (about 99 % for normal errors),
//! so that at least 95 % holds although each uncertainty is itself estimated from the data.
//! Minimum/maximum times are bounds: a time
//! between two stamps is known to ±1 tick. Quantisation (Widrow, Kollár & Liu, IEEE Trans.
//! Instrum. Meas. 45(2), 1996): q²/12 per stamp and q²/6 per period at random phase; a steady
//! clock commensurate with the tick gives two period readings, σ = q·√(p(1−p)).

mod bulk;

use serde::Serialize;

use super::allan::AllanStream;
use super::stats::{DevHistogram, IntStats, extremes, narrow_sums};

/// Settings of the clock statistics.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClockConfig {
    /// A pulse shorter than this fraction of the typical phase of its polarity is a glitch.
    pub glitch_fraction: f64,
    /// Or an absolute glitch threshold in ns (overrides the fraction).
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
            glitch_fraction: 0.3,
            glitch_ns: None,
            stall_periods: 4.0,
            n_cycles: [10, 100],
            tie_record: 1024,
            allan_tau0_s: 1e-3,
            max_events: 1000,
        }
    }
}

/// A short pulse: a double-clocking risk.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Glitch {
    /// Probe time of its first edge, s.
    pub at_s: f64,
    /// true: a high pulse (inside a low phase); false: a low pulse.
    pub high: bool,
    /// Width, ns.
    pub width_ns: f64,
}

/// The clock stopped.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Stall {
    /// Probe time of the last edge before the gap, s.
    pub at_s: f64,
    /// Length of the gap, ns.
    pub gap_ns: f64,
}

/// Least-squares sums for the TIE fit: u_k = t_k − t0 − k·T_ref over rising edges k.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct FitSums {
    n: i128,
    sk: i128,
    skk: i128,
    su: i128,
    sku: i128,
    suu: i128,
    /// A term beyond the plain-arithmetic bounds was added (sums saturate from then on).
    big: bool,
}

impl FitSums {
    #[inline]
    fn add(&mut self, k: i64, u: i64) {
        // While every term had k and |u| below 2^40 and n < 2^40, no sum can pass 2^120: plain
        // arithmetic (the usual case). One larger term switches this fit to saturating for good.
        const LIM: i64 = 1 << 40;
        if !self.big && (0..LIM).contains(&k) && (-LIM..LIM).contains(&u) && self.n < 1 << 40 {
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
    fn merge(&mut self, o: &FitSums) {
        self.big |= o.big;
        self.n += o.n;
        self.sk = self.sk.saturating_add(o.sk);
        self.skk = self.skk.saturating_add(o.skk);
        self.su = self.su.saturating_add(o.su);
        self.sku = self.sku.saturating_add(o.sku);
        self.suu = self.suu.saturating_add(o.suu);
    }
    /// RMS residual (ticks) against the least-squares line.
    fn residual_rms(&self) -> Option<f64> {
        if self.n < 3 {
            return None;
        }
        let n = self.n as f64;
        // n·Σab − Σa·Σb exactly when it fits, in floating point otherwise
        let centred = |sab: i128, sa: i128, sb: i128| match self
            .n
            .checked_mul(sab)
            .and_then(|x| sa.checked_mul(sb).and_then(|y| x.checked_sub(y)))
        {
            Some(v) => v as f64,
            None => n * sab as f64 - sa as f64 * sb as f64,
        };
        let sxx = centred(self.skk, self.sk, self.sk) / n;
        let sxy = centred(self.sku, self.sk, self.su) / n;
        let syy = centred(self.suu, self.su, self.su) / n;
        if sxx <= 0.0 {
            return None;
        }
        Some(((syy - sxy * sxy / sxx).max(0.0) / n).sqrt())
    }
}

/// A gap longer than this (in ticks) is never one period: continuity restarts after it, which
/// also bounds every sum of periods.
pub const MAX_GAP_TICKS: u64 = 1 << 40;

/// Coverage factor of every expanded uncertainty.
pub const K: f64 = 2.5;

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

#[derive(Clone, Copy, Debug, Default)]
struct RunAcc {
    start: u64,
    last: u64,
    n: u64,
    sum_p: u64,
    sum_h: u64,
    nh: u64,
    min_h: u64,
    min_l: u64,
}

/// Periods between refreshes of the glitch and stall thresholds: the typical period, high and
/// low time are the means over the previous such segment (the first refresh comes with the
/// first period).
pub const REFRESH: u32 = 512;

/// Periods per batch: summing 256 contiguous periods lifts their random walk far above the
/// quantisation of the two end stamps, so period noise is measurable even below one tick.
pub const BATCH: u32 = 256;

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
    fit: FitSums,
    tie_rec_max_pkpk: f64,
    tie_rec_ss: f64,
    tie_rec_n: u64,
    ncycle: [IntStats; 2],
    /// Sums of `BATCH` contiguous periods (batch means for the mean period's uncertainty).
    batch: IntStats,
    /// Edges seen (including glitch edges).
    pub edges: u64,
    /// Glitches.
    pub glitches: u64,
    /// Stalls.
    pub stalls: u64,
    /// Contiguous runs of periods (each gap, loss or glitch starts a new one).
    pub runs: u64,
    /// First and last tick seen.
    pub span: Option<(u64, u64)>,
    // count windows (when the probe only counts)
    count_edges: u64,
    count_ticks: u64,
    count_windows: u64,
    count_reciprocal: bool,
    samples: u64,
    samples_high: u64,
}

impl ClockAcc {
    fn new(origin: i64, ref_high: i64, ref_low: i64) -> ClockAcc {
        ClockAcc {
            period: IntStats::new(origin),
            high: IntStats::new(ref_high),
            low: IntStats::new(ref_low),
            c2c: IntStats::new(0),
            hist_period: DevHistogram::new(origin),
            hist_high: DevHistogram::new(ref_high),
            hist_low: DevHistogram::new(ref_low),
            fit: FitSums::default(),
            tie_rec_max_pkpk: 0.0,
            tie_rec_ss: 0.0,
            tie_rec_n: 0,
            ncycle: [IntStats::new(0), IntStats::new(0)],
            batch: IntStats::new(origin * BATCH as i64),
            edges: 0,
            glitches: 0,
            stalls: 0,
            runs: 0,
            span: None,
            count_edges: 0,
            count_ticks: 0,
            count_windows: 0,
            count_reciprocal: false,
            samples: 0,
            samples_high: 0,
        }
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
        self.fit.merge(&o.fit);
        self.tie_rec_max_pkpk = self.tie_rec_max_pkpk.max(o.tie_rec_max_pkpk);
        self.tie_rec_ss += o.tie_rec_ss;
        self.tie_rec_n += o.tie_rec_n;
        for i in 0..2 {
            self.ncycle[i].merge(&o.ncycle[i]);
        }
        self.batch.merge(&o.batch);
        self.edges += o.edges;
        self.glitches += o.glitches;
        self.stalls += o.stalls;
        self.runs += o.runs;
        self.span = match (self.span, o.span) {
            (Some(a), Some(b)) => Some((a.0.min(b.0), a.1.max(b.1))),
            (a, b) => a.or(b),
        };
        self.count_edges += o.count_edges;
        self.count_ticks += o.count_ticks;
        self.count_windows += o.count_windows;
        self.count_reciprocal |= o.count_reciprocal;
        self.samples += o.samples;
        self.samples_high += o.samples_high;
    }
}

/// Edge processing state of one channel (continuity, references, look-behind).
#[derive(Clone, Debug)]
pub struct ClockState {
    /// Settings.
    pub cfg: ClockConfig,
    tick_ns: f64,
    /// Reference values fixed at the first cycle (origins of all sums).
    refs: Option<(i64, i64, i64)>,
    pending: Option<(u64, bool)>,
    /// The edge after `pending` when the pulse between them was short (undecided glitch).
    suspect: Option<(u64, bool)>,
    last_rise: Option<u64>,
    last_fall: Option<u64>,
    last_edge: Option<u64>,
    prev_period: Option<i64>,
    /// Tick and ideal-cycle index of the last committed rise (kept across gaps).
    anchor: Option<(u64, u64)>,
    fit_origin: Option<(u64, u64)>,
    /// The run's latest rises (for the N-cycle error).
    rises: bulk::RiseHistory,
    record: Vec<u64>,
    batch_sum: i64,
    batch_n: u32,
    typ_high: f64,
    typ_low: f64,
    typ_period: f64,
    /// Sums and counts of periods, highs and lows since the last refresh (their means become
    /// the typical values at the next refresh).
    seg: [(u64, u64); 3],
    /// Glitch thresholds for high and low pulses and the stall gap, in ticks (refreshed from
    /// the typical values every [`REFRESH`] periods, so the per-edge path compares integers).
    glitch_high_ticks: u64,
    glitch_low_ticks: u64,
    stall_ticks: u64,
    refresh: u32,
    /// Length of a short run (20 ms) in ticks.
    run_ticks: u64,
    allan: Option<AllanStream>,
    allan_every: u64,
    allan_countdown: u64,
    /// The current block.
    pub acc: Option<ClockAcc>,
    run: RunAcc,
    /// The last two finished short runs (older first).
    pub runs: [Option<ShortRun>; 2],
    /// Recent glitches.
    pub glitch_events: Vec<Glitch>,
    /// Recent stalls.
    pub stall_events: Vec<Stall>,
    scratch: Box<bulk::Scratch>,
}

impl ClockState {
    /// A channel with a tick of `tick_ns`.
    pub fn new(cfg: ClockConfig, tick_ns: f64) -> ClockState {
        ClockState {
            rises: bulk::RiseHistory::new(cfg.n_cycles[0].max(cfg.n_cycles[1]) as usize),
            scratch: bulk::Scratch::new(),
            record: Vec::with_capacity(cfg.tie_record),
            cfg,
            tick_ns,
            refs: None,
            pending: None,
            suspect: None,
            last_rise: None,
            last_fall: None,
            last_edge: None,
            prev_period: None,
            anchor: None,
            fit_origin: None,
            batch_sum: 0,
            batch_n: 0,
            typ_high: 0.0,
            typ_low: 0.0,
            typ_period: 0.0,
            seg: [(0, 0); 3],
            glitch_high_ticks: 0,
            glitch_low_ticks: 0,
            stall_ticks: u64::MAX,
            refresh: 0,
            run_ticks: (20e6 / tick_ns) as u64,
            allan: None,
            allan_every: 1,
            allan_countdown: 0,
            acc: None,
            run: RunAcc::default(),
            runs: [None, None],
            glitch_events: Vec::new(),
            stall_events: Vec::new(),
        }
    }

    /// Tick length.
    pub fn tick_ns(&self) -> f64 {
        self.tick_ns
    }

    /// The reference values (period, high, low in ticks) once the first cycle is seen.
    pub fn refs(&self) -> Option<(i64, i64, i64)> {
        self.refs
    }

    /// An empty block with this channel's references (None before the first cycle).
    pub fn empty_acc(&self) -> Option<ClockAcc> {
        self.refs.map(|(p, h, l)| ClockAcc::new(p, h, l))
    }

    /// The Allan estimator (session-wide).
    pub fn allan(&self) -> Option<&AllanStream> {
        self.allan.as_ref()
    }

    /// The current short run so far (None when empty).
    pub fn current_run(&self) -> Option<ShortRun> {
        self.short(&self.run)
    }

    fn short(&self, r: &RunAcc) -> Option<ShortRun> {
        (r.n > 0).then(|| {
            let q = self.tick_ns;
            let mean_p = r.sum_p as f64 / r.n as f64;
            ShortRun {
                end_s: r.last as f64 * q * 1e-9,
                cycles: r.n,
                frequency_hz: 1e9 / (mean_p * q),
                duty: if r.nh > 0 {
                    r.sum_h as f64 / r.nh as f64 / mean_p
                } else {
                    0.0
                },
                high_min_ns: if r.nh > 0 {
                    r.min_h as f64 * q
                } else {
                    f64::NAN
                },
                low_min_ns: if r.min_l < u64::MAX {
                    r.min_l as f64 * q
                } else {
                    f64::NAN
                },
            }
        })
    }

    fn close_run(&mut self) {
        if let Some(s) = self.short(&self.run) {
            self.runs = [self.runs[1], Some(s)];
        }
        self.run = RunAcc {
            min_h: u64::MAX,
            min_l: u64::MAX,
            ..RunAcc::default()
        };
    }

    /// Continuity is broken (data lost, new connection, burst): no interval spans the break.
    pub fn break_continuity(&mut self) {
        self.close_run();
        self.pending = None;
        self.suspect = None;
        self.last_rise = None;
        self.last_fall = None;
        self.last_edge = None;
        self.prev_period = None;
        self.rises.clear();
        self.record.clear();
        self.batch_sum = 0;
        self.batch_n = 0;
        self.allan_countdown = 0;
        if let Some(a) = self.allan.as_mut() {
            a.gap();
        }
    }

    fn ensure_acc(&mut self, first_period: Option<i64>) -> Option<&mut ClockAcc> {
        if self.acc.is_none() {
            if self.refs.is_none() {
                let p = first_period?;
                let (h, l) = (p / 2, p - p / 2);
                self.refs = Some((p, h.max(1), l.max(1)));
                self.typ_period = p as f64;
            }
            self.acc = self.empty_acc();
        }
        self.acc.as_mut()
    }

    /// `n` more periods: the refresh segment ends at [`REFRESH`] periods (or at the very first
    /// period, which sets the thresholds at once) and the thresholds are refreshed.
    fn count_periods(&mut self, n: u32) {
        self.refresh += n;
        if self.refresh >= REFRESH || self.refresh == 1 && self.stall_ticks == u64::MAX {
            self.refresh = 0;
            self.refresh_thresholds();
        }
    }

    /// The typical period, high and low become the means of the segment since the last
    /// refresh (a kind without samples keeps its value), then the thresholds follow them.
    fn refresh_thresholds(&mut self) {
        let typ = [&mut self.typ_period, &mut self.typ_high, &mut self.typ_low];
        for ((sum, n), typ) in self.seg.iter_mut().zip(typ) {
            if *n > 0 {
                *typ = *sum as f64 / *n as f64;
            }
            (*sum, *n) = (0, 0);
        }
        let (h, l) = match self.cfg.glitch_ns {
            Some(ns) => (ns / self.tick_ns, ns / self.tick_ns),
            None => (
                self.cfg.glitch_fraction * self.typ_high,
                self.cfg.glitch_fraction * self.typ_low,
            ),
        };
        // a pulse narrower than the threshold (strictly) is a glitch
        self.glitch_high_ticks = h.ceil().max(0.0) as u64;
        self.glitch_low_ticks = l.ceil().max(0.0) as u64;
        self.stall_ticks = if self.typ_period > 0.0 {
            (self.cfg.stall_periods * self.typ_period) as u64
        } else {
            u64::MAX
        };
    }

    /// One edge (ticks strictly increasing, polarities alternating).
    #[inline]
    pub fn edge(&mut self, tick: u64, rising: bool) {
        // time never runs backwards here: a probe that does (a bug, a restart) starts a new run
        let newest = self
            .suspect
            .or(self.pending)
            .map(|p| p.0)
            .or(self.last_edge);
        if newest.is_some_and(|n| tick <= n) || self.anchor.is_some_and(|(at, _)| tick <= at) {
            self.break_continuity();
            // the cycle index carries on from here (the ideal clock cannot follow a restart)
            self.anchor = self.anchor.map(|(_, k)| (tick, k));
            self.last_edge = None;
            if let Some(a) = self.acc.as_mut() {
                a.span = None;
            }
        }
        if let Some(a) = self.acc.as_mut() {
            a.edges += 1;
            a.span = Some(a.span.map_or((tick, tick), |(s, _)| (s, tick)));
        }
        let Some((pt, pr)) = self.pending else {
            self.pending = Some((tick, rising));
            return;
        };
        // the edge before this one must have the other polarity
        let before = self.suspect.map_or(pr, |(_, nr)| nr);
        if before == rising {
            // polarity broken (an edge went missing): restart continuity here
            self.break_continuity();
            self.pending = Some((tick, rising));
            return;
        }
        if let Some((nt, nr)) = self.suspect.take() {
            // P→N was short. A glitch near an edge leaves two short pulses in a row (P→N, N→M):
            // the shorter one is the glitch, the other is what is left of a real phase.
            let second = tick - nt;
            if second < self.glitch_ticks(nr) && second < nt - pt {
                self.glitch(nt, nr, second);
                // P stays pending: the phase it opened goes on
            } else {
                self.glitch(pt, pr, nt - pt);
                self.pending = Some((tick, rising));
            }
            return;
        }
        if tick - pt < self.glitch_ticks(pr) {
            // a short pulse: decide with the next edge which two edges to set aside
            self.suspect = Some((tick, rising));
            return;
        }
        self.commit(pt, pr);
        self.pending = Some((tick, rising));
    }

    #[inline]
    fn glitch_ticks(&self, high_pulse: bool) -> u64 {
        if high_pulse {
            self.glitch_high_ticks
        } else {
            self.glitch_low_ticks
        }
    }

    fn glitch(&mut self, at: u64, high: bool, width: u64) {
        let g = Glitch {
            at_s: at as f64 * self.tick_ns * 1e-9,
            high,
            width_ns: width as f64 * self.tick_ns,
        };
        if self.glitch_events.len() < self.cfg.max_events {
            self.glitch_events.push(g);
        }
        if let Some(a) = self.acc.as_mut() {
            a.glitches += 1;
        }
    }

    /// A decided edge: the stall check, then the rising or falling side (kept apart: the
    /// falling side is small enough to inline, the rising side carries the period figures).
    #[inline]
    fn commit(&mut self, t: u64, rising: bool) {
        if let Some(last) = self.last_edge
            && (t - last > self.stall_ticks || t - last > MAX_GAP_TICKS)
        {
            self.stall(last, t);
        }
        self.last_edge = Some(t);
        if rising {
            self.commit_rise(t);
        } else {
            self.commit_fall(t);
        }
    }

    #[cold]
    fn stall(&mut self, last: u64, t: u64) {
        let s = Stall {
            at_s: last as f64 * self.tick_ns * 1e-9,
            gap_ns: (t - last) as f64 * self.tick_ns,
        };
        if self.stall_events.len() < self.cfg.max_events {
            self.stall_events.push(s);
        }
        if let Some(a) = self.acc.as_mut() {
            a.stalls += 1;
        }
        self.break_continuity();
    }

    fn commit_rise(&mut self, t: u64) {
        let period = self.last_rise.map(|r| (t - r) as i64);
        let low = match (self.last_rise, self.last_fall) {
            (Some(r), Some(f)) if f > r => Some((t - f) as i64),
            (None, Some(f)) => Some((t - f) as i64),
            _ => None,
        };
        // this rise's index on the ideal clock: +1 per period, whole cycles across a gap
        let idx = match (self.last_rise, self.anchor) {
            (Some(_), Some((_, k))) => k + 1,
            (None, Some((at, k))) if self.typ_period > 0.0 => {
                k + (t.saturating_sub(at) as f64 / self.typ_period)
                    .round()
                    .max(1.0) as u64
            }
            (None, Some((_, k))) => k + 1,
            (_, None) => 0,
        };
        self.last_rise = Some(t);
        self.anchor = Some((t, idx));
        if self.ensure_acc(period).is_none() {
            return;
        }
        if let Some(l) = low {
            seg_add(&mut self.seg[2], l as u64, 1);
            self.run.min_l = self.run.min_l.min(l as u64);
            let a = self.acc.as_mut().expect("block exists");
            a.low.add(l, t, idx);
            a.hist_low.record(l);
        }
        match period {
            Some(p) => self.on_period(t, p, idx),
            None => {
                if let Some(a) = self.acc.as_mut() {
                    a.runs += 1;
                }
            }
        }
    }

    #[inline]
    fn commit_fall(&mut self, t: u64) {
        if let Some(r) = self.last_rise {
            let h = (t - r) as i64;
            seg_add(&mut self.seg[1], h as u64, 1);
            if self.run.n > 0 {
                self.run.sum_h += h as u64;
                self.run.nh += 1;
                self.run.min_h = self.run.min_h.min(h as u64);
            }
            let idx = self.anchor.map_or(0, |a| a.1);
            if self.ensure_acc(None).is_some() {
                let a = self.acc.as_mut().expect("block exists");
                a.high.add(h, t, idx);
                a.hist_high.record(h);
            }
        }
        self.last_fall = Some(t);
    }

    /// A period ending with the rise at `t`, whose ideal-cycle index is `idx` (the opening rise
    /// has `idx − 1`).
    fn on_period(&mut self, t: u64, p: i64, idx: u64) {
        let k = idx - 1;
        let (pref, _, _) = self.refs.expect("refs set with the first period");
        seg_add(&mut self.seg[0], p as u64, 1);
        self.count_periods(1);
        let prev = self.prev_period.replace(p);
        // phase of this rising edge against the session's reference clock; the first period
        // also brings its opening edge into the fit
        let first_fit = self.fit_origin.is_none();
        let (k0, t0) = *self.fit_origin.get_or_insert((k, t - p as u64));
        // in i128 and clamped: a probe's ticks may be anywhere in u64
        let clamp = |v: i128| v.clamp(i128::from(i64::MIN / 4), i128::from(i64::MAX / 4)) as i64;
        let kk = clamp(i128::from(k) + 1 - i128::from(k0));
        let u = clamp(i128::from(t) - i128::from(t0) - i128::from(kk) * i128::from(pref));
        // N-cycle error: the run's latest rises (the first period brings its opening rise)
        if self.rises.is_empty() {
            self.rises.extend(&[t - p as u64]);
        }
        self.rises.extend(&[t]);
        let latest = self.rises.as_slice();
        let mut ncyc = [None, None];
        for (i, &n) in self.cfg.n_cycles.iter().enumerate() {
            let n = n as usize;
            if latest.len() > n {
                let back = latest[latest.len() - 1 - n];
                ncyc[i] = Some((t - back) as i64 - n as i64 * pref);
            }
        }
        // detrended TIE record
        self.record.push(t);
        let record_done = self.record.len() >= self.cfg.tie_record;
        let rec = if record_done {
            Some(tie_record_pkpk(&self.record, self.scratch.tie_buf()))
        } else {
            None
        };
        if record_done {
            self.record.clear();
        }
        // Allan phase samples every `allan_every` cycles
        if self.allan.is_none() {
            let period_s = p as f64 * self.tick_ns * 1e-9;
            self.allan_every = ((self.cfg.allan_tau0_s / period_s).round() as u64).max(1);
            self.allan = Some(AllanStream::new(
                self.allan_every as f64 * pref as f64 * self.tick_ns * 1e-9,
            ));
        }
        let every = self.allan_every;
        if self.run.n > 0 && t - self.run.start > self.run_ticks {
            self.close_run();
        }
        if self.run.n == 0 {
            self.run.start = t;
            if self.run.min_h == 0 {
                self.run.min_h = u64::MAX;
                self.run.min_l = u64::MAX;
            }
        }
        self.run.n += 1;
        self.run.sum_p += p as u64;
        self.run.last = t;
        self.batch_sum += p;
        self.batch_n += 1;
        let batch_done = (self.batch_n == BATCH).then(|| std::mem::take(&mut self.batch_sum));
        if batch_done.is_some() {
            self.batch_n = 0;
        }
        let a = self.acc.as_mut().expect("block exists");
        if let Some(b) = batch_done {
            a.batch.add(b, t, idx);
        }
        a.period.add(p, t, idx);
        a.hist_period.record(p);
        if let Some(pp) = prev {
            a.c2c.add(p - pp, t, idx);
        } else {
            a.runs += 1;
        }
        if first_fit {
            a.fit.add(0, 0);
        }
        a.fit.add(kk, u);
        for (i, v) in ncyc.iter().enumerate() {
            if let Some(v) = v {
                a.ncycle[i].add(*v, t, idx);
            }
        }
        if let Some((pkpk, ss, n)) = rec {
            a.tie_rec_max_pkpk = a.tie_rec_max_pkpk.max(pkpk);
            a.tie_rec_ss += ss;
            a.tie_rec_n += n;
        }
        self.allan_countdown = self.allan_countdown.saturating_sub(1);
        if self.allan_countdown == 0
            && let Some(al) = self.allan.as_mut()
        {
            self.allan_countdown = every;
            al.push(u as f64 * self.tick_ns);
        }
    }

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

/// Add `n` samples summing to `sum` to a segment's (sum, count).
#[inline]
fn seg_add(seg: &mut (u64, u64), sum: u64, n: u64) {
    seg.0 = seg.0.saturating_add(sum);
    seg.1 += n;
}

/// Peak-to-peak and sum of squares of residuals of edge times against their own least-squares
/// line (a detrended TIE record), in ticks. A record spanning less than 2^26 ticks takes two
/// passes: exact integer sums of the offsets from its first edge (the sum of squared residuals
/// follows exactly from them), then the extremes in floating point. Otherwise the chord through
/// the record's ends is taken out in integers first (residuals do not change when a line is
/// removed), leaving small numbers in `w` (a reused buffer).
#[inline(always)]
fn tie_record_pkpk(t: &[u64], w: &mut Vec<i64>) -> (f64, f64, u64) {
    let n = t.len();
    if n < 3 {
        // a line passes through one or two points exactly
        return (0.0, 0.0, n as u64);
    }
    if let Some(r) = tie_record_short(t) {
        return r;
    }
    let t0 = t[0];
    let step = t[n - 1].wrapping_sub(t0) / (n as u64 - 1);
    w.clear();
    let mut at = t0;
    w.extend(t.iter().map(|&x| {
        let v = x.wrapping_sub(at) as i64;
        at = at.wrapping_add(step);
        v
    }));
    let (wlo, whi) = extremes(w);
    let nf = n as f64;
    // deviations below 2^20 over at most 2^16 stamps: exact sums in u64 (which vectorise;
    // floating-point sums cannot be reordered), centred exactly in i128, and 32-bit values
    // for the floating-point pass
    if i128::from(whi) - i128::from(wlo) < 1 << 20 && n <= 1 << 16 {
        let (se, see, ske) = narrow_sums::<true>(w, wlo);
        let n128 = n as i128;
        let sk = n128 * (n128 - 1) / 2;
        let sxx = n128 * n128 * (n128 * n128 - 1) / 12;
        let sxy = n128 * i128::from(ske) - sk * i128::from(se);
        let syy = n128 * i128::from(see) - i128::from(se) * i128::from(se);
        let b = sxy as f64 / sxx as f64;
        let pkpk = residual_pkpk(w, b, |v| f64::from(v.wrapping_sub(wlo) as i32));
        return (
            pkpk,
            ((syy as f64 - sxy as f64 * b) / nf).max(0.0),
            n as u64,
        );
    }
    let (mut sw, mut skw, mut sww) = (0.0f64, 0.0f64, 0.0f64);
    for (k, &v) in w.iter().enumerate() {
        let v = v as f64;
        sw += v;
        skw += k as f64 * v;
        sww += v * v;
    }
    let sk = nf * (nf - 1.0) / 2.0;
    let sxx = nf * (nf * nf - 1.0) / 12.0;
    let sxy = skw - sk * sw / nf;
    let b = sxy / sxx;
    let pkpk = residual_pkpk(w, b, |v| v as f64);
    (pkpk, (sww - sw * sw / nf - sxy * b).max(0.0), n as u64)
}

/// Peak to peak of the residuals value(x_k) − b·k over a record: b is finite, so no NaN can
/// occur and plain compares in four lanes give the extremes (k counts in f64, exactly).
#[inline(always)]
fn residual_pkpk<T: Copy>(x: &[T], b: f64, value: impl Fn(T) -> f64) -> f64 {
    let (mut lo4, mut hi4) = ([f64::INFINITY; 4], [f64::NEG_INFINITY; 4]);
    let mut kf = [0.0, 1.0, 2.0, 3.0];
    let mut quads = x.chunks_exact(4);
    for q in &mut quads {
        for (j, &v) in q.iter().enumerate() {
            let r = value(v) - b * kf[j];
            lo4[j] = if r < lo4[j] { r } else { lo4[j] };
            hi4[j] = if r > hi4[j] { r } else { hi4[j] };
            kf[j] += 4.0;
        }
    }
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (j, &v) in quads.remainder().iter().enumerate() {
        let r = value(v) - b * kf[j];
        lo = lo.min(r);
        hi = hi.max(r);
    }
    for j in 0..4 {
        lo = lo.min(lo4[j]);
        hi = hi.max(hi4[j]);
    }
    hi - lo
}

/// [`tie_record_pkpk`] for a record of 3…4095 edges within 2^26 ticks of its first (None
/// otherwise): offsets y below 2^26 over k < 2^12 keep Σy, Σk·y and Σy² exact in u64.
#[inline(always)]
fn tie_record_short(t: &[u64]) -> Option<(f64, f64, u64)> {
    let n = t.len();
    if !(3..1 << 12).contains(&n) {
        return None;
    }
    let t0 = t[0];
    // wrapping sums, trusted only when every offset is below 2^26 (their OR is)
    let (mut or, mut se, mut ske, mut see) = (0u64, 0u64, 0u64, 0u64);
    for (k, &x) in t.iter().enumerate() {
        let y = x.wrapping_sub(t0);
        or |= y;
        let y32 = u64::from(y as u32);
        se = se.wrapping_add(y32);
        ske = ske.wrapping_add(u64::from(k as u32) * y32);
        see = see.wrapping_add(y32 * y32);
    }
    if or >= 1 << 26 {
        return None;
    }
    // n·(centred sums): sxx = n·Σ(k − k̄)², sxy = n·Σ(k − k̄)(y − ȳ), syy = n·Σ(y − ȳ)²
    let n128 = n as i128;
    let sk = n128 * (n128 - 1) / 2;
    let sxx = n128 * n128 * (n128 * n128 - 1) / 12;
    let sxy = n128 * i128::from(ske) - sk * i128::from(se);
    let syy = n128 * i128::from(see) - i128::from(se) * i128::from(se);
    // the residual sum of squares, (syy·sxx − sxy²) / (n·sxx), with an exact numerator
    // (below 2^125 for these bounds)
    let ss = (syy * sxx - sxy * sxy).max(0) as f64 / (n128 * sxx) as f64;
    let b = sxy as f64 / sxx as f64;
    // y as f64 exactly: below 2^52, its bits under the exponent of 2^52, less 2^52 (no
    // 64-bit integer conversion in these vector units)
    const TWO_52: u64 = 0x4330_0000_0000_0000;
    let as_f64 = |y: u64| f64::from_bits(y | TWO_52) - f64::from_bits(TWO_52);
    let pkpk = residual_pkpk(t, b, |x| as_f64(x.wrapping_sub(t0)));
    Some((pkpk, ss, n as u64))
}

/// Residuals (in ticks) of edge times against their own least-squares line: the TIE of a
/// record against an ideal clock fitted to it.
pub fn detrended(t: &[u64]) -> Vec<f64> {
    let Some(&first) = t.first() else {
        return Vec::new();
    };
    let n = t.len() as f64;
    let t0 = first as f64;
    let (mut sk, mut skk, mut su, mut sku) = (0.0, 0.0, 0.0, 0.0);
    for (k, &ti) in t.iter().enumerate() {
        let (k, u) = (k as f64, ti as f64 - t0);
        sk += k;
        skk += k * k;
        su += u;
        sku += k * u;
    }
    let den = n * skk - sk * sk;
    let b = if den != 0.0 {
        (n * sku - sk * su) / den
    } else {
        0.0
    };
    let a = (su - b * sk) / n;
    t.iter()
        .enumerate()
        .map(|(k, &ti)| ti as f64 - t0 - a - b * k as f64)
        .collect()
}

/// A figure the probe could not observe, and why.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Unavailable {
    /// Which figure.
    pub figure: String,
    /// Why.
    pub reason: String,
}

/// Percentiles of a time distribution, ns.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Percentiles {
    /// 0.1 %.
    pub p0_1: f64,
    /// 1 %.
    pub p1: f64,
    /// Median.
    pub p50: f64,
    /// 99 %.
    pub p99: f64,
    /// 99.9 %.
    pub p99_9: f64,
}

/// N-cycle error figures.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct NCycle {
    /// N.
    pub n: u32,
    /// RMS of (t(k+N) − t(k)) − N·T, ns.
    pub rms_ns: f64,
    /// Largest |·|, ns.
    pub max_abs_ns: f64,
}

/// An Allan deviation point.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AllanPoint {
    /// τ, s.
    pub tau_s: f64,
    /// Overlapping Allan deviation (fractional frequency).
    pub adev: f64,
    /// Terms in the estimate.
    pub terms: u64,
}

/// The measured clock of one channel. Uncertainties are expanded (k = 2.5).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClockSnapshot {
    /// Channel id.
    pub channel: u8,
    /// Its label.
    pub label: String,
    /// "edge timestamps" or "count windows".
    pub method: String,
    /// Probe tick: the resolution of every single time, ns.
    pub resolution_ns: f64,
    /// Edges seen.
    pub edges: u64,
    /// Complete periods measured.
    pub cycles: u64,
    /// Count windows received (a counting probe), and the input cycles they counted.
    pub count_windows: u64,
    /// Input cycles counted over those windows.
    pub counted_cycles: u64,
    /// Frequency (reciprocal counting: measured periods over their total time).
    pub frequency_hz: Option<f64>,
    /// Its uncertainty (resolution and jitter; k = 2.5).
    pub frequency_uncertainty_hz: Option<f64>,
    /// Timebase accuracy the probe states (separate from resolution), Hz.
    pub frequency_accuracy_hz: Option<f64>,
    /// Mean period.
    pub period_mean_ns: Option<f64>,
    /// Shortest period.
    pub period_min_ns: Option<f64>,
    /// Longest period.
    pub period_max_ns: Option<f64>,
    /// Mean high time.
    pub high_mean_ns: Option<f64>,
    /// Shortest high time (the worst cycle; ± one tick).
    pub high_min_ns: Option<f64>,
    /// When it happened, s of probe time.
    pub high_min_at_s: Option<f64>,
    /// Which cycle.
    pub high_min_cycle: Option<u64>,
    /// Longest high time.
    pub high_max_ns: Option<f64>,
    /// Mean low time.
    pub low_mean_ns: Option<f64>,
    /// Shortest low time (the worst cycle; ± one tick).
    pub low_min_ns: Option<f64>,
    /// When it happened.
    pub low_min_at_s: Option<f64>,
    /// Which cycle.
    pub low_min_cycle: Option<u64>,
    /// Longest low time.
    pub low_max_ns: Option<f64>,
    /// Duty cycle: mean high / mean period.
    pub duty: Option<f64>,
    /// Its uncertainty (k = 2.5).
    pub duty_uncertainty: Option<f64>,
    /// Statistical duty from level samples, with its Wilson 95 % interval.
    pub duty_sampled: Option<(f64, f64, f64)>,
    /// Period jitter RMS as measured (sample standard deviation of periods).
    pub period_jitter_rms_ns: Option<f64>,
    /// Period jitter RMS, population form (÷N).
    pub period_jitter_rms_pop_ns: Option<f64>,
    /// Quantisation floor of period jitter at random phase: q/√6.
    pub period_jitter_floor_ns: f64,
    /// True when the measured jitter is explained by quantisation alone (below resolution).
    pub period_jitter_below_resolution: bool,
    /// De-biased estimate √(s² − q²/6), labelled as such.
    pub period_jitter_debiased_ns: Option<f64>,
    /// Uncertainty of the jitter estimate (k = 2.5).
    pub period_jitter_uncertainty_ns: Option<f64>,
    /// Period peak to peak.
    pub period_jitter_pkpk_ns: Option<f64>,
    /// Periods in the jitter figures.
    pub period_jitter_n: u64,
    /// Cycle-to-cycle jitter RMS (adjacent period differences).
    pub cycle_to_cycle_rms_ns: Option<f64>,
    /// Largest |adjacent period difference|.
    pub cycle_to_cycle_max_ns: Option<f64>,
    /// Quantisation floor of cycle-to-cycle jitter at random phase: q/√2.
    pub cycle_to_cycle_floor_ns: f64,
    /// TIE RMS against a least-squares ideal clock over the window.
    pub tie_rms_ns: Option<f64>,
    /// Largest TIE peak to peak within detrended records.
    pub tie_pkpk_ns: Option<f64>,
    /// Cycles per TIE record.
    pub tie_record_cycles: usize,
    /// N-cycle error.
    pub n_cycle: Vec<NCycle>,
    /// Overlapping Allan deviation (session).
    pub allan: Vec<AllanPoint>,
    /// Period percentiles.
    pub period_percentiles: Option<Percentiles>,
    /// High-time percentiles.
    pub high_percentiles: Option<Percentiles>,
    /// Low-time percentiles.
    pub low_percentiles: Option<Percentiles>,
    /// Glitches counted.
    pub glitches: u64,
    /// Stalls counted.
    pub stalls: u64,
    /// Figures the probe cannot observe, and why.
    pub unavailable: Vec<Unavailable>,
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

/// Figures of one channel from a merged block (and the session's Allan estimator).
pub fn snapshot(
    channel: u8,
    label: &str,
    acc: Option<&ClockAcc>,
    state: &ClockState,
    timebase_ppm: u16,
    with_allan: bool,
) -> ClockSnapshot {
    let q = state.tick_ns;
    let floor = q / 6f64.sqrt();
    let mut s = ClockSnapshot {
        channel,
        label: label.to_string(),
        method: "edge timestamps".into(),
        resolution_ns: q,
        edges: 0,
        cycles: 0,
        count_windows: 0,
        counted_cycles: 0,
        frequency_hz: None,
        frequency_uncertainty_hz: None,
        frequency_accuracy_hz: None,
        period_mean_ns: None,
        period_min_ns: None,
        period_max_ns: None,
        high_mean_ns: None,
        high_min_ns: None,
        high_min_at_s: None,
        high_min_cycle: None,
        high_max_ns: None,
        low_mean_ns: None,
        low_min_ns: None,
        low_min_at_s: None,
        low_min_cycle: None,
        low_max_ns: None,
        duty: None,
        duty_uncertainty: None,
        duty_sampled: None,
        period_jitter_rms_ns: None,
        period_jitter_rms_pop_ns: None,
        period_jitter_floor_ns: floor,
        period_jitter_below_resolution: false,
        period_jitter_debiased_ns: None,
        period_jitter_uncertainty_ns: None,
        period_jitter_pkpk_ns: None,
        period_jitter_n: 0,
        cycle_to_cycle_rms_ns: None,
        cycle_to_cycle_max_ns: None,
        cycle_to_cycle_floor_ns: q / 2f64.sqrt(),
        tie_rms_ns: None,
        tie_pkpk_ns: None,
        tie_record_cycles: state.cfg.tie_record,
        n_cycle: Vec::new(),
        allan: Vec::new(),
        period_percentiles: None,
        high_percentiles: None,
        low_percentiles: None,
        glitches: 0,
        stalls: 0,
        unavailable: Vec::new(),
    };
    let Some(a) = acc else {
        s.unavailable.push(Unavailable {
            figure: "all".into(),
            reason: "no complete clock cycle yet".into(),
        });
        return s;
    };
    s.edges = a.edges;
    s.count_windows = a.count_windows;
    s.counted_cycles = a.count_edges;
    s.glitches = a.glitches;
    s.stalls = a.stalls;
    let tick_s = q * 1e-9;
    if a.period.n == 0 && a.count_windows > 0 {
        // a counting probe: frequency and sampled duty only
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
            s.frequency_uncertainty_hz =
                Some(K * per * (a.count_windows as f64).sqrt() / 3f64.sqrt());
        }
        if a.samples > 0 {
            let p = a.samples_high as f64 / a.samples as f64;
            let (lo, hi) = super::stats::wilson_95(a.samples_high, a.samples).unwrap_or((0.0, 1.0));
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
            s.unavailable.push(Unavailable {
                figure: f.into(),
                reason: why.into(),
            });
        }
        if timebase_ppm > 0 {
            s.frequency_accuracy_hz = s.frequency_hz.map(|f| f * f64::from(timebase_ppm) * 1e-6);
        }
        return s;
    }
    s.cycles = a.period.n;
    if let (Some(mean_p), Some(sp)) = (a.period.mean(), a.period.std_sample().or(Some(0.0))) {
        let mean_ns = mean_p * q;
        s.period_mean_ns = Some(mean_ns);
        s.period_min_ns = Some(a.period.min as f64 * q);
        s.period_max_ns = Some(a.period.max as f64 * q);
        let f = 1e9 / mean_ns;
        s.frequency_hz = Some(f);
        // mean period: accumulated period noise σ_p²/N plus the quantisation of each run's two
        // end stamps (q²/6 per run) over N². σ_p from batch means when there are enough batches
        // (it shows even below one tick), else from the period spread less quantisation.
        let n = a.period.n as f64;
        let sp_ns = sp * q;
        let sigma_p2 = if a.batch.n >= 8 {
            let vb = a.batch.std_sample().unwrap_or(0.0) * q;
            ((vb * vb - q * q / 6.0) / f64::from(BATCH)).max(0.0)
        } else {
            (sp_ns * sp_ns - q * q / 6.0)
                .max(0.0)
                .max(if sp_ns * sp_ns < 2.0 * q * q / 6.0 {
                    floor * floor
                } else {
                    0.0
                })
        };
        let runs = a.runs.max(1) as f64;
        let u_t = (sigma_p2 / n + runs * q * q / 6.0 / (n * n)).sqrt();
        s.frequency_uncertainty_hz = Some(K * f * u_t / mean_ns);
        if timebase_ppm > 0 {
            s.frequency_accuracy_hz = Some(f * f64::from(timebase_ppm) * 1e-6);
        }
        s.period_jitter_rms_ns = Some(sp_ns);
        s.period_jitter_rms_pop_ns = a.period.std_pop().map(|v| v * q);
        s.period_jitter_n = a.period.n;
        s.period_jitter_pkpk_ns = Some((a.period.max - a.period.min) as f64 * q);
        let debiased = (sp_ns * sp_ns - q * q / 6.0).max(0.0).sqrt();
        s.period_jitter_debiased_ns = Some(debiased);
        s.period_jitter_below_resolution = debiased < floor;
        // chi-square spread of a standard deviation, plus the error of subtracting q²/6: at most
        // about q²/24/σ, and vanishing as exp(−2π²σ²/q²) once the jitter dithers the quantiser
        // (the Gaussian characteristic function at 2π/q; Widrow, Kollár & Liu 1996)
        let stat = sp_ns / (2.0 * (n - 1.0).max(1.0)).sqrt();
        let model = if debiased > 0.0 {
            (q * q / 24.0 / debiased)
                * (-2.0 * std::f64::consts::PI.powi(2) * (debiased / q).powi(2)).exp()
        } else {
            floor
        };
        s.period_jitter_uncertainty_ns = Some(K * (stat * stat + model * model).sqrt());
        // coherent sampling (less spread than random phase would give): the quantisation error of
        // a mean does not average away; a systematic term of up to half a tick remains
        let coherent = sp_ns * sp_ns < 0.5 * q * q / 6.0;
        let sys = if coherent { q / 12f64.sqrt() } else { 0.0 };
        let (mh, ml) = (a.high.mean(), a.low.mean());
        if let Some(mh) = mh {
            s.high_mean_ns = Some(mh * q);
            s.high_min_ns = Some(a.high.min as f64 * q);
            s.high_max_ns = Some(a.high.max as f64 * q);
            s.high_min_at_s = Some(a.high.min_at.0 as f64 * tick_s);
            s.high_min_cycle = Some(a.high.min_at.1);
            let sh = a.high.std_sample().unwrap_or(0.0) * q;
            let u_h = (sh * sh / a.high.n as f64 + sys * sys).sqrt();
            s.duty = Some(mh * q / mean_ns);
            s.duty_uncertainty = Some(
                K * ((u_h / mean_ns).powi(2) + (mh * q * u_t / (mean_ns * mean_ns)).powi(2)).sqrt(),
            );
        }
        if let Some(ml) = ml {
            s.low_mean_ns = Some(ml * q);
            s.low_min_ns = Some(a.low.min as f64 * q);
            s.low_max_ns = Some(a.low.max as f64 * q);
            s.low_min_at_s = Some(a.low.min_at.0 as f64 * tick_s);
            s.low_min_cycle = Some(a.low.min_at.1);
        }
        if a.c2c.n > 0 {
            s.cycle_to_cycle_rms_ns = a.c2c.rms_about_zero().map(|v| v * q);
            s.cycle_to_cycle_max_ns =
                Some(a.c2c.max.unsigned_abs().max(a.c2c.min.unsigned_abs()) as f64 * q);
        }
        s.tie_rms_ns = a.fit.residual_rms().map(|v| v * q);
        if a.tie_rec_n > 0 {
            s.tie_pkpk_ns = Some(a.tie_rec_max_pkpk * q);
        }
        let pref = state.refs.map_or(0, |r| r.0);
        for (i, &n) in state.cfg.n_cycles.iter().enumerate() {
            let st = &a.ncycle[i];
            if st.n > 1 {
                // error against N·(mean period) rather than N·reference
                let shift = (mean_p - pref as f64) * f64::from(n);
                let m = st.mean().unwrap_or(0.0);
                let sd = st.std_pop().unwrap_or(0.0);
                let max_abs = ((st.max as f64 - shift).abs()).max((st.min as f64 - shift).abs());
                let rms = (sd * sd + (m - shift).powi(2)).sqrt();
                s.n_cycle.push(NCycle {
                    n,
                    rms_ns: rms * q,
                    max_abs_ns: max_abs * q,
                });
            }
        }
        s.period_percentiles = percentiles(&a.hist_period, q);
        s.high_percentiles = percentiles(&a.hist_high, q);
        s.low_percentiles = percentiles(&a.hist_low, q);
    }
    if with_allan && let Some(al) = state.allan() {
        s.allan = al
            .points()
            .into_iter()
            .map(|(tau_s, adev, terms)| AllanPoint { tau_s, adev, terms })
            .collect();
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The closed-form record figures equal the residuals computed one by one (against
    /// `detrended`, the plain two-pass least squares).
    #[test]
    fn tie_record_figures_match_plain_least_squares() {
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        // short records (two-pass sums), ones too long or too wide for them (integer sums after
        // the chord is taken out), and one whose residuals are too wide for those (floating
        // point): (edges, step, spread of a step, short)
        for (n, step, wobble, short) in [
            (3usize, 1000, 7, true),
            (7, 1000, 7, true),
            (10, 1000, 7, true),
            (1024, 1000, 7, true),
            (1024, 1 << 17, 7, false),
            (5000, 1000, 7, false),
            (1024, 1 << 30, 1 << 24, false),
        ] {
            let mut t = 1u64 << 41;
            let ticks: Vec<u64> = (0..n)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    t += step + x % wobble;
                    t
                })
                .collect();
            assert_eq!(tie_record_short(&ticks).is_some(), short, "{n} × {step}");
            let r = detrended(&ticks);
            let lo = r.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = r.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let ss: f64 = r.iter().map(|v| v * v).sum();
            let (pkpk, ss2, cnt) = tie_record_pkpk(&ticks, &mut Vec::new());
            assert_eq!(cnt, n as u64);
            // to a millionth of a tick, or a part in 10^9 of a wide record
            assert!(
                (pkpk - (hi - lo)).abs() < 1e-6 * (1e-3 * (hi - lo)).max(1.0),
                "{n}: {pkpk} vs {}",
                hi - lo
            );
            assert!((ss2 - ss).abs() < 1e-6 * ss.max(1.0), "{n}: {ss2} vs {ss}");
        }
    }

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
        fast.add(i64::MAX / 4, i64::MAX / 4);
        fast.add(i64::MAX / 4, i64::MIN / 4);
        assert!(fast.big && fast.suu > 0);
    }
}

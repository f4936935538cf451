//! The per-edge state machine of one clock channel: the reference path [`ClockState::edge`]
//! handles every case (glitch look-ahead, stalls, polarity breaks, time running backwards, the
//! first cycles of a run); `bulk.rs` takes clean stretches with identical results.

use serde::Serialize;

use super::super::allan::AllanStream;
use super::acc::{ClockAcc, FitSums, RunAcc, ShortRun, seg_add};
use super::buffers::{RiseHistory, Scratch};
use super::config::{
    BATCH, ClockConfig, MAX_GAP_TICKS, MIN_TIE_STRETCH, REFRESH, SEEDED_CYCLES, SHORT_RUN_NS,
    SPACING_FRACTION,
};
use super::tie::close_record;

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

/// Edge processing state of one channel (continuity, references, look-behind).
#[derive(Clone, Debug)]
pub struct ClockState {
    /// Settings.
    pub cfg: ClockConfig,
    pub(super) tick_ns: f64,
    /// Reference values fixed at the first cycle (origins of all sums).
    pub(super) refs: Option<(i64, i64, i64)>,
    pub(super) pending: Option<(u64, bool)>,
    /// The edge after `pending` when the pulse between them was short (undecided glitch).
    pub(super) suspect: Option<(u64, bool)>,
    pub(super) last_rise: Option<u64>,
    pub(super) last_fall: Option<u64>,
    pub(super) last_edge: Option<u64>,
    pub(super) prev_period: Option<i64>,
    /// Tick and ideal-cycle index of the last committed rise (kept across gaps).
    pub(super) anchor: Option<(u64, u64)>,
    /// Origin of the current contiguous stretch's TIE fit (cycle index, tick of its first rise).
    pub(super) fit_origin: Option<(u64, u64)>,
    /// The TIE fit of the current contiguous stretch (closed into the block at a break).
    pub(super) stretch: FitSums,
    /// The run's latest rises (for the N-cycle error).
    pub(super) rises: RiseHistory,
    /// The TIE record being filled (committed rises).
    pub(super) record: Vec<u64>,
    /// Full TIE records kept for an observer (None: not kept).
    pub(super) records_out: Option<Vec<Vec<u64>>>,
    pub(super) batch_sum: i64,
    pub(super) batch_n: u32,
    typ_high: f64,
    typ_low: f64,
    typ_period: f64,
    /// Sums and counts of periods, highs and lows since the last refresh (their means become
    /// the typical values at the next refresh).
    pub(super) seg: [(u64, u64); 3],
    /// Pulses set aside as glitches since the last refresh.
    pub(super) seg_glitches: u64,
    /// Glitch thresholds for high and low pulses and the stall gap, in ticks (refreshed from
    /// the typical values every [`REFRESH`] periods, so the per-edge path compares integers).
    pub(super) glitch_high_ticks: u64,
    pub(super) glitch_low_ticks: u64,
    /// Two falls, two rises closer than this (ticks) make the newer one undecided: an extra
    /// pulse wider than the real phase of its polarity still splits a cycle, and one that ends
    /// just before the end of a long phase brings the edge closing it early.
    pub(super) spacing_ticks: [u64; 2],
    pub(super) stall_ticks: u64,
    pub(super) refresh: u32,
    /// Periods of the current refresh segment: 1 (the first period sets the thresholds), 16,
    /// 256, then [`REFRESH`] (early typical values come from more than one cycle soon).
    pub(super) segment: u32,
    /// Length of a short run (20 ms) in ticks.
    pub(super) run_ticks: u64,
    pub(super) allan: Option<AllanStream>,
    pub(super) allan_every: u64,
    pub(super) allan_countdown: u64,
    /// The current block.
    pub acc: Option<ClockAcc>,
    /// The current block holds every cycle since the first period seeded the typical values
    /// (no block was handed over since), and the glitch list's length at that seed.
    pub(super) seed_whole: bool,
    pub(super) seed_events: usize,
    /// Edges seen while there was no block (before the first period, or after a block was
    /// handed over): counted into the next block, so edge counts are exact.
    pub(super) loose_edges: u64,
    pub(super) run: RunAcc,
    /// The last two finished short runs (older first).
    pub(crate) runs: [Option<ShortRun>; 2],
    /// Recent glitches.
    pub(crate) glitch_events: Vec<Glitch>,
    /// Recent stalls.
    pub(crate) stall_events: Vec<Stall>,
    /// The first short phases a threshold-counting probe stamped.
    pub(crate) short_events: Vec<super::figures::ShortPhaseEvent>,
    pub(super) scratch: Box<Scratch>,
}

impl ClockState {
    /// A channel with a tick of `tick_ns`.
    pub fn new(cfg: ClockConfig, tick_ns: f64) -> ClockState {
        ClockState {
            rises: RiseHistory::new(cfg.n_cycles[0].max(cfg.n_cycles[1]) as usize),
            scratch: Scratch::new(),
            record: Vec::with_capacity(cfg.tie_record),
            records_out: None,
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
            stretch: FitSums::default(),
            batch_sum: 0,
            batch_n: 0,
            typ_high: 0.0,
            typ_low: 0.0,
            typ_period: 0.0,
            seg: [(0, 0); 3],
            seg_glitches: 0,
            glitch_high_ticks: 0,
            glitch_low_ticks: 0,
            spacing_ticks: [0, 0],
            stall_ticks: u64::MAX,
            refresh: 0,
            segment: 1,
            run_ticks: (SHORT_RUN_NS / tick_ns) as u64,
            allan: None,
            allan_every: 1,
            allan_countdown: 0,
            acc: None,
            seed_whole: false,
            seed_events: 0,
            loose_edges: 0,
            run: RunAcc::default(),
            runs: [None, None],
            glitch_events: Vec::new(),
            stall_events: Vec::new(),
            short_events: Vec::new(),
        }
    }

    /// Tick length.
    pub fn tick_ns(&self) -> f64 {
        self.tick_ns
    }

    /// Keep every full TIE record for [`ClockState::take_records`] (for an observer: the records
    /// the figures were taken from).
    pub(crate) fn keep_records(&mut self) {
        self.records_out.get_or_insert_with(Vec::new);
    }

    /// The full TIE records kept since the last call, oldest first.
    pub(crate) fn take_records(&mut self) -> impl Iterator<Item = Vec<u64>> + '_ {
        self.records_out.iter_mut().flat_map(|r| r.drain(..))
    }

    /// An empty block with this channel's references (None before the first cycle).
    pub(super) fn empty_acc(&self) -> Option<ClockAcc> {
        self.refs.map(|(p, h, l)| ClockAcc::new(p, h, l))
    }

    /// The current short run so far (None when empty).
    pub(crate) fn current_run(&self) -> Option<ShortRun> {
        self.run.figures(self.tick_ns)
    }

    fn close_run(&mut self) {
        if let Some(s) = self.run.figures(self.tick_ns) {
            self.runs = [self.runs[1], Some(s)];
        }
        self.run = RunAcc::fresh();
    }

    /// Continuity is broken (data lost, new connection, burst): no interval spans the break.
    pub fn break_continuity(&mut self) {
        self.close_run();
        self.close_stretch();
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

    /// Time ran backwards (or stood still) to `tick`: a probe restart or bug. Continuity breaks,
    /// and the cycle index carries on from `tick` (the ideal clock cannot follow a restart).
    pub(crate) fn restart_at(&mut self, tick: u64) {
        self.break_continuity();
        self.anchor = self.anchor.map(|(_, k)| (tick, k));
    }

    /// The current contiguous stretch ends: its TIE residuals go into the block (when it is long
    /// enough), and the next stretch is fitted from its own origin.
    fn close_stretch(&mut self) {
        let fit = std::mem::take(&mut self.stretch);
        self.fit_origin = None;
        if fit.n >= MIN_TIE_STRETCH
            && let (Some(ss), Some(a)) = (fit.residual_ss(), self.acc.as_mut())
        {
            a.tie_pool = (a.tie_pool.0 + ss, a.tie_pool.1 + fit.n as u64);
        }
    }

    /// The current stretch's TIE residuals (ticks², rises) when it is long enough to count.
    pub(super) fn open_stretch_tie(&self) -> Option<(f64, u64)> {
        (self.stretch.n >= MIN_TIE_STRETCH)
            .then(|| {
                self.stretch
                    .residual_ss()
                    .map(|ss| (ss, self.stretch.n as u64))
            })
            .flatten()
    }

    fn ensure_acc(&mut self, first_period: Option<i64>) -> Option<&mut ClockAcc> {
        if self.acc.is_none() {
            let seeding = self.refs.is_none();
            if seeding {
                let p = first_period?;
                let (h, l) = (p / 2, p - p / 2);
                self.refs = Some((p, h.max(1), l.max(1)));
                self.typ_period = p as f64;
            }
            self.acc = self.empty_acc();
            self.seed_whole = seeding;
            self.seed_events = self.glitch_events.len();
            if let Some(a) = self.acc.as_mut() {
                a.edges += std::mem::take(&mut self.loose_edges);
            }
        }
        self.acc.as_mut()
    }

    /// `n` more periods: the refresh segment ends at `segment` periods (the very first period
    /// sets the thresholds at once) and the thresholds are refreshed.
    pub(super) fn count_periods(&mut self, n: u32) {
        self.refresh += n;
        if self.refresh >= self.segment {
            self.refresh = 0;
            self.segment = (self.segment * 16).min(REFRESH);
            self.refresh_thresholds();
        }
    }

    /// The typical period, high and low become the means of the segment since the last
    /// refresh (a kind without samples keeps its value), then the thresholds follow them.
    fn refresh_thresholds(&mut self) {
        let set_aside = std::mem::take(&mut self.seg_glitches);
        if set_aside > 2 * self.seg[0].1.max(1) {
            // more than two pulses set aside per cycle: the typical values describe merged
            // phases (a stall or a slow start inside the period that seeded them), and every
            // decision since agreed with them; seed them again from the next period
            self.seg = [(0, 0); 3];
            (self.typ_period, self.typ_high, self.typ_low) = (0.0, 0.0, 0.0);
            self.segment = 1;
            self.drop_seeded_cycles();
        }
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
        // a pulse narrower than the threshold (strictly) is undecided; with a fraction, one
        // tick more, as a fragment just under it may read one tick longer
        let margin = if self.cfg.glitch_ns.is_some() { 0 } else { 1 };
        self.glitch_high_ticks = h.ceil().max(0.0) as u64 + margin;
        self.glitch_low_ticks = l.ceil().max(0.0) as u64 + margin;
        // a fraction of the period; for the edges that close a pulse of the shorter phase's
        // polarity (rises close lows), the later of that and the period less half the
        // shorter phase and a tick: a runt of that polarity that ends just before the end of
        // the long phase brings the edge closing it sooner (the long phase, less the fragment
        // after the runt, is under the period by the whole short phase), while a real cycle's
        // edge comes later unless its period is off by half the shorter phase. The edges of
        // the other polarity keep the fraction: their pulses are the long phases, which a
        // short real period would make look like the start of a phase with a runt after it
        let spacing = |least: f64| least.ceil().max(0.0) as u64;
        let fraction = SPACING_FRACTION * self.typ_period;
        let shorter = self.typ_high.min(self.typ_low);
        let tight = spacing(fraction.max(self.typ_period - 0.5 * shorter - 1.0));
        self.spacing_ticks = if self.typ_low < self.typ_high {
            [spacing(fraction), tight]
        } else {
            [tight, spacing(fraction)]
        };
        self.stall_ticks = if self.typ_period > 0.0 {
            (self.cfg.stall_periods * self.typ_period) as u64
        } else {
            u64::MAX
        };
    }

    /// The cycles judged since a wrong first seed leave the figures: when the current block
    /// holds all of them (none handed over yet) and they are the first refresh segments'
    /// ([`SEEDED_CYCLES`] at most), the block starts afresh (edges, stalls and count windows
    /// kept; the pulses set aside under the wrong seed were real phases, so they leave the
    /// glitch count and list) with the dropped periods counted as set aside, and every
    /// statistic that spans cycles (TIE fit and record, N-cycle rises, batch, Allan stream,
    /// the previous period) starts again with the next period. Both paths reach this at the
    /// same edge (the refresh comes after the period that completes a segment).
    fn drop_seeded_cycles(&mut self) {
        let (Some(a), Some((p, h, l))) = (self.acc.as_ref(), self.refs) else {
            return;
        };
        if !self.seed_whole || a.period.n > SEEDED_CYCLES {
            return;
        }
        let mut fresh = ClockAcc::new(p, h, l);
        fresh.edges = a.edges;
        fresh.stalls = a.stalls;
        // each pulse set aside merged two cycles' periods into one: the cycles are the
        // periods and those pulses
        fresh.set_aside_cycles = a.set_aside_cycles + a.period.n + a.glitches;
        fresh.count_edges = a.count_edges;
        fresh.count_ticks = a.count_ticks;
        fresh.count_windows = a.count_windows;
        fresh.count_reciprocal = a.count_reciprocal;
        fresh.samples = a.samples;
        fresh.samples_high = a.samples_high;
        // the stretch goes on: one run, its periods from the next one
        fresh.runs = 1;
        self.acc = Some(fresh);
        self.glitch_events.truncate(self.seed_events);
        self.stretch = FitSums::default();
        self.fit_origin = None;
        self.record.clear();
        self.rises.clear();
        self.batch_sum = 0;
        self.batch_n = 0;
        self.prev_period = None;
        self.allan = None;
        self.allan_countdown = 0;
    }

    /// One edge (ticks strictly increasing, polarities alternating; anything else starts over
    /// cleanly).
    #[inline]
    pub fn edge(&mut self, tick: u64, rising: bool) {
        // time never runs backwards here: a probe that does (a bug, a restart) starts a new run
        let newest = self
            .suspect
            .or(self.pending)
            .map(|p| p.0)
            .or(self.last_edge);
        if newest.is_some_and(|n| tick <= n) || self.anchor.is_some_and(|(at, _)| tick <= at) {
            self.restart_at(tick);
        }
        match self.acc.as_mut() {
            Some(a) => a.edges += 1,
            None => self.loose_edges += 1,
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
            self.decide(pt, pr, nt, nr, tick, rising);
            return;
        }
        self.after_pending(pt, pr, tick, rising);
    }

    /// The newest edge `tick` after the pending edge `pt` (no undecided edge between): held
    /// back when the pulse it closes is short or it comes too soon after the last edge of its
    /// polarity, else the pending edge is committed.
    #[inline]
    fn after_pending(&mut self, pt: u64, pr: bool, tick: u64, rising: bool) {
        if tick - pt < self.glitch_ticks(pr)
            || self
                .last_edge
                .is_some_and(|le| tick - le < self.spacing_ticks[usize::from(rising)])
        {
            // decide with the next edge which two edges (if any) to set aside
            self.suspect = Some((tick, rising));
            return;
        }
        self.commit(pt, pr);
        self.pending = Some((tick, rising));
    }

    /// The pending edge P, the undecided edge N and the newest edge M: three readings of the
    /// pulses A (last committed edge → P), B (P → N) and C (N → M), each judged by how far
    /// its phases lie from the typical ones (ticks, one tick allowed for quantisation):
    /// B and C are real phases (or close two typical periods); B is a runt inside the phase A opened (A + B + C is one
    /// phase); or C is a runt inside the phase P opened (A is a whole phase, B + C only the
    /// start of one); or B is real and C the start of a phase a runt cuts later. The best fit
    /// wins; within a tick, the edges are kept.
    fn decide(&mut self, pt: u64, pr: bool, nt: u64, nr: bool, tick: u64, rising: bool) {
        let (b, c) = ((nt - pt) as f64, (tick - nt) as f64);
        let a = self.last_edge.map(|le| (pt - le) as f64);
        let (typ_b, typ_a) = (self.typ_phase(pr), self.typ_phase(nr));
        let off = |x: f64, typ: f64| ((x - typ).abs() - 1.0).max(0.0);
        let over = |x: f64, typ: f64| (x - typ - 1.0).max(0.0);
        // an absolute threshold is a promise: a pulse under it is never a real phase
        let forced = self.cfg.glitch_ns.is_some() && nt - pt < self.glitch_ticks(pr);
        // real phases: each near its typical value, or both cycles they close near the typical
        // period (phases of a jittery clock near the resolution)
        let keep = match (forced, a) {
            (true, _) => f64::INFINITY,
            (false, Some(a)) => (off(b, typ_b) + off(c, typ_a))
                .min(off(a + b, self.typ_period) + off(b + c, self.typ_period)),
            (false, None) => off(b, typ_b) + off(c, typ_a),
        };
        let (inner, outer) = match a {
            Some(a) => (off(a + b + c, typ_a), off(a, typ_a) + over(b + c, typ_b)),
            None => (over(b + c, typ_a), over(b + c, typ_b)),
        };
        // or B real and C only the start of a phase that a runt cuts further on (A whole): P
        // is real, and the next decision, one pulse on, sees that runt whole (and can still
        // set aside N and M as a runt inside B's phase). It has no tick of doubt: it must fit
        // at least as well as both readings with a runt here
        let start = match a {
            Some(a) => off(a, typ_a) + off(b, typ_b) + over(c, typ_a),
            None => off(b, typ_b) + over(c, typ_a),
        };
        // a tick of doubt keeps the edges: near the resolution (or while the typical values
        // come from the first cycles) a short real phase and a runt differ by less
        if keep <= inner.min(outer) + 1.0 || start <= inner.min(outer) {
            // real phases: P is committed, M is judged after N as any newest edge
            self.commit(pt, pr);
            self.pending = Some((nt, nr));
            self.after_pending(nt, nr, tick, rising);
        } else if outer < inner || outer == inner && c < b {
            self.glitch(nt, nr, tick - nt);
            // P stays pending: the phase it opened goes on
        } else {
            self.glitch(pt, pr, nt - pt);
            self.pending = Some((tick, rising));
        }
    }

    /// The typical phase a pulse opened by an edge of this polarity has (ticks).
    #[inline]
    fn typ_phase(&self, rising: bool) -> f64 {
        if rising { self.typ_high } else { self.typ_low }
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
        self.seg_glitches += 1;
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
            a.idle_ticks += t - last;
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
        let rec = (self.record.len() >= self.cfg.tie_record).then(|| {
            close_record(
                &mut self.record,
                &mut self.scratch.tie,
                &mut self.records_out,
            )
        });
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
        a.cover(t - p as u64, t);
        a.hist_period.record(p);
        if let Some(pp) = prev {
            a.c2c.add(p - pp, t, idx);
        } else {
            a.runs += 1;
        }
        if first_fit {
            self.stretch.add(0, 0);
        }
        self.stretch.add(kk, u);
        for (i, v) in ncyc.iter().enumerate() {
            if let Some(v) = v {
                a.ncycle[i].add(*v, t, idx);
            }
        }
        if let Some(r) = rec {
            a.add_tie_record(r);
        }
        self.allan_countdown = self.allan_countdown.saturating_sub(1);
        if self.allan_countdown == 0
            && let Some(al) = self.allan.as_mut()
        {
            self.allan_countdown = every;
            al.push(u as f64 * self.tick_ns);
        }
        // the refresh after the period is in (as the bulk path counts a step's periods)
        self.count_periods(1);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A clock that starts inside a stall: the first period (ten periods long) seeds wrong
    /// typical values, every real phase then looks like a runt inside a long one; the engine
    /// must seed again instead of setting the clock aside for good.
    #[test]
    fn a_stall_in_the_first_period_does_not_hold_the_thresholds() {
        let mut st = ClockState::new(ClockConfig::default(), 8.0);
        let (high, low) = (18u64, 18u64);
        let mut t = 1_000u64;
        st.edge(t, true);
        t += high;
        st.edge(t, false);
        // the stall: the line stays low for ten periods
        t += 10 * (high + low);
        let cycles = 20_000u64;
        for _ in 0..cycles {
            st.edge(t, true);
            t += high;
            st.edge(t, false);
            t += low;
        }
        let a = st.acc.as_ref().expect("a block");
        // a clean clock: only pulses of the first refresh segment (16 periods as the wrong
        // values count them) may have been set aside; without the new seed, nearly all are
        assert!(a.glitches < cycles / 100, "{} pulses set aside", a.glitches);
        assert!(a.period.n > cycles - 300, "{} periods", a.period.n);
        let mean = a.period.mean().expect("periods");
        assert!((mean - 36.0).abs() < 0.5, "mean period {mean} ticks");
        // the cycles judged with the wrong seed left the figures, counted as set aside: the
        // longest period is the clock's, and the edges are all counted
        assert!(a.set_aside_cycles > 0, "nothing set aside");
        assert_eq!(a.period.n + a.set_aside_cycles, cycles, "every period once");
        assert_eq!(a.period.max, 36, "longest period");
        assert_eq!(a.edges, 2 + 2 * cycles);
    }
}

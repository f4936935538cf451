//! The streaming engine: validated events (from `ingest`) in, per-channel statistics kept in
//! blocks, a [`Snapshot`] for a window out. Pure and synchronous; memory is bounded: per channel
//! one block per second of the recent window, a session total and capped event lists.

use std::collections::BTreeMap;

use firmware_protocol::Counters;
use serde::Serialize;

use super::blocks::Blocks;
use super::clock::{self, ClockAcc, ClockConfig, ClockSnapshot, ClockState};
use super::ingest::{BreakCause, Count, Event, Sample};
use super::lines::{self, LineAcc, LineSnapshot, LineState};
use super::onset::onset_at;
use super::rails::{self, RailAcc, RailConfig, RailSnapshot, RailState};
use super::series::{Series, SeriesRec};
use super::snapshot::{FaultOnset, Snapshot, Trust, Window};
use super::stats::DevHistogram;
use crate::probe::{ChannelKind, LineRole, ProbeDesc};

/// Settings of the engine.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct EngineConfig {
    /// Clock statistics.
    pub clock: ClockConfig,
    /// Rail statistics (limit for rails without their own).
    pub rail: RailConfig,
    /// Per-rail lower limits by label, mV.
    pub rail_limits_mv: BTreeMap<String, f64>,
    /// Length of the recent window, s.
    pub window_s: f64,
    /// Block length, s (the recent window moves in these steps).
    pub block_s: f64,
}

impl Default for EngineConfig {
    fn default() -> Self {
        EngineConfig {
            clock: ClockConfig::default(),
            rail: RailConfig::default(),
            rail_limits_mv: BTreeMap::new(),
            window_s: 10.0,
            block_s: 1.0,
        }
    }
}

/// Fault-line onsets kept.
const MAX_ONSETS: usize = 100;
/// Events of each kind a snapshot lists.
const SNAPSHOT_EVENTS: usize = 50;
/// Sag events a snapshot lists per rail.
const SNAPSHOT_SAGS: usize = 20;
/// Line events kept per line.
const LINE_EVENTS: usize = 1000;

struct ClockChannel {
    label: String,
    state: ClockState,
    blocks: Blocks<ClockAcc>,
}

struct RailChannel {
    label: String,
    state: RailState,
    blocks: Blocks<RailAcc>,
    interval_s: f64,
}

struct LineChannel {
    label: String,
    role: LineRole,
    state: LineState,
    blocks: Blocks<LineAcc>,
}

/// The streaming engine.
pub struct Engine {
    cfg: EngineConfig,
    probe: Option<ProbeDesc>,
    clocks: BTreeMap<u8, ClockChannel>,
    rails: BTreeMap<u8, RailChannel>,
    lines: BTreeMap<u8, LineChannel>,
    trust: Trust,
    decoder_base: Counters,
    now_tick: u64,
    block_start: u64,
    block_ticks: u64,
    onsets: Vec<FaultOnset>,
    /// The onset a stopped heartbeat would mean (captured at each heartbeat edge).
    heartbeat_onset: Option<FaultOnset>,
    /// Whether the clocks keep their full TIE records (for an observer).
    keep_records: bool,
    /// The time-resolved session.
    series: SeriesRec,
}

impl Engine {
    /// An engine waiting for a probe's HELLO.
    pub(super) fn new(cfg: EngineConfig) -> Engine {
        Engine {
            cfg,
            probe: None,
            clocks: BTreeMap::new(),
            rails: BTreeMap::new(),
            lines: BTreeMap::new(),
            trust: Trust::default(),
            decoder_base: Counters::default(),
            now_tick: 0,
            block_start: 0,
            block_ticks: 1,
            onsets: Vec::new(),
            heartbeat_onset: None,
            keep_records: false,
            series: SeriesRec::new(),
        }
    }

    /// Forget all statistics (keeps the probe description and the reconnection count).
    pub fn reset(&mut self) {
        let trust = Trust {
            reconnects: self.trust.reconnects,
            ..Trust::default()
        };
        let probe = self.probe.take();
        self.start_over(probe, trust);
    }

    /// Everything anew with `probe`'s channels, keeping the decoder baseline and `trust`.
    fn start_over(&mut self, probe: Option<ProbeDesc>, trust: Trust) {
        *self = Engine {
            decoder_base: self.decoder_base,
            keep_records: self.keep_records,
            trust,
            ..Engine::new(self.cfg.clone())
        };
        if let Some(p) = probe {
            self.install(p);
        }
    }

    /// Keep the clocks' full TIE records for [`Engine::take_records`].
    pub(super) fn keep_records(&mut self) {
        self.keep_records = true;
        for c in self.clocks.values_mut() {
            c.state.keep_records();
        }
    }

    /// The TIE records kept since the last call, per clock channel.
    pub(super) fn take_records(&mut self, mut f: impl FnMut(u8, &[u64])) {
        for (&id, c) in &mut self.clocks {
            for r in c.state.take_records() {
                f(id, &r);
            }
        }
    }

    fn break_all(&mut self) {
        for c in self.clocks.values_mut() {
            c.state.break_continuity();
        }
        for r in self.rails.values_mut() {
            r.state.break_continuity();
        }
    }

    /// Take the decoder's counters (totals since it started) into the trust counters.
    pub(super) fn on_decoder_counters(&mut self, c: &Counters) {
        let b = &self.decoder_base;
        self.trust.frames = c.frames - b.frames;
        self.trust.lost_frames = c.lost_frames - b.lost_frames;
        self.trust.crc_errors = c.crc_errors - b.crc_errors;
        self.trust.other_rejects = (c.cobs_errors + c.runts + c.oversized + c.bad_version)
            - (b.cobs_errors + b.runts + b.oversized + b.bad_version);
    }

    fn install(&mut self, p: ProbeDesc) {
        let tick = p.tick_ns;
        for c in &p.channels {
            match c.kind {
                ChannelKind::Edge => {
                    self.clocks.entry(c.id).or_insert_with(|| {
                        let mut state = ClockState::new(self.cfg.clock.clone(), tick);
                        if self.keep_records {
                            state.keep_records();
                        }
                        ClockChannel {
                            label: c.label.clone(),
                            state,
                            blocks: Blocks::new(),
                        }
                    });
                }
                ChannelKind::Analog => {
                    let mut rc = self.cfg.rail.clone();
                    if let Some(l) = self.cfg.rail_limits_mv.get(&c.label) {
                        rc.limit_mv = *l;
                    }
                    self.rails.entry(c.id).or_insert_with(|| RailChannel {
                        label: c.label.clone(),
                        state: RailState::new(rc, c.scale, tick),
                        blocks: Blocks::new(),
                        interval_s: 0.0,
                    });
                }
                ChannelKind::Line => {
                    self.lines.entry(c.id).or_insert_with(|| LineChannel {
                        label: c.label.clone(),
                        role: LineRole::from_byte(c.info),
                        state: LineState::new(tick, LINE_EVENTS),
                        blocks: Blocks::new(),
                    });
                }
            }
        }
        self.block_ticks = ((self.cfg.block_s * 1e9 / tick) as u64).max(1);
        let rails = self
            .rails
            .values()
            .map(|r| (r.label.clone(), r.state.cfg.limit_mv))
            .collect();
        self.series.install(tick, rails);
        self.probe = Some(p);
    }

    /// Probe time reached `tick`: close the blocks it has passed.
    fn advance(&mut self, tick: u64) {
        if tick > self.now_tick {
            self.now_tick = tick;
        }
        if self.now_tick < self.block_start.saturating_add(self.block_ticks) {
            return;
        }
        let keep = (self.cfg.window_s / self.cfg.block_s).ceil() as usize;
        self.watch_series();
        for c in self.clocks.values_mut() {
            c.blocks.roll(c.state.acc.take(), keep, ClockAcc::merge);
        }
        self.series.block_closed();
        for r in self.rails.values_mut() {
            r.blocks.roll(r.state.acc.take(), keep, RailAcc::merge);
        }
        for l in self.lines.values_mut() {
            let acc = std::mem::replace(&mut l.state.acc, LineState::empty_acc());
            l.blocks.roll(Some(acc), keep, LineAcc::merge);
        }
        let n = (self.now_tick - self.block_start) / self.block_ticks;
        self.block_start += n * self.block_ticks;
    }

    /// Take one validated event.
    pub(super) fn on_event(&mut self, ev: &Event<'_>) {
        match *ev {
            Event::Probe { desc, new } => {
                if new {
                    // a different probe (or the first): start over with its channels
                    self.start_over(Some(desc.clone()), self.trust);
                } else {
                    self.break_all();
                }
            }
            Event::Break { channel, cause } => self.on_break(channel, cause),
            Event::Reconnect => {
                self.trust.reconnects += 1;
                self.break_all();
            }
            Event::LinkGap { .. } => self.break_all(),
            Event::Edges {
                channel,
                first_rising,
                ticks,
            } => {
                self.advance(ticks[0]);
                if let Some(c) = self.clocks.get_mut(&channel) {
                    c.state.edges(ticks, first_rising);
                }
                self.advance(ticks[ticks.len() - 1]);
            }
            Event::Lines {
                channel,
                first_rising,
                ticks,
            } => self.on_lines(channel, first_rising, ticks),
            Event::Count(w) => self.on_count(&w),
            Event::Extremes(w) => {
                self.advance(w.end_tick);
                if let Some(c) = self.clocks.get_mut(&w.channel) {
                    c.state.extremes_window(&w);
                }
            }
            Event::Thresholds(v) => {
                self.advance(v.end_tick);
                if let Some(c) = self.clocks.get_mut(&v.channel) {
                    c.state.threshold_window(&v);
                }
            }
            Event::Analog {
                channel,
                interval_ticks,
                samples,
            } => self.on_analog(channel, interval_ticks, samples),
            Event::Status {
                overflows,
                edges_dropped,
                samples_dropped,
            } => {
                self.trust.probe_overflows = u64::from(overflows);
                self.trust.probe_edges_dropped = u64::from(edges_dropped);
                self.trust.probe_samples_dropped = u64::from(samples_dropped);
            }
            Event::Log(_) => {}
            Event::Unknown { lost_before, .. } => {
                self.trust.probe_lost_flags += u64::from(lost_before);
                self.trust.unknown_channel += 1;
            }
            Event::Undecodable => self.trust.bad_messages += 1,
        }
        self.watch_series();
    }

    /// The series takes what is new in the first clock (finished short runs, glitches, stalls).
    fn watch_series(&mut self) {
        let now_s = self.snapshot_time_s();
        if let Some(c) = self.clocks.values().next() {
            self.series.watch(&c.state, now_s);
        }
    }

    fn on_break(&mut self, channel: u8, cause: BreakCause) {
        if cause == BreakCause::Lost {
            self.trust.probe_lost_flags += 1;
        }
        if let Some(c) = self.clocks.get_mut(&channel) {
            match cause {
                BreakCause::Reversal { to_tick } => c.state.restart_at(to_tick),
                _ => c.state.break_continuity(),
            }
        }
        if let Some(r) = self.rails.get_mut(&channel) {
            r.state.break_continuity();
        }
        if let Some(l) = self.lines.get_mut(&channel) {
            l.state.break_continuity();
        }
    }

    fn on_lines(&mut self, channel: u8, first_rising: bool, ticks: &[u64]) {
        self.advance(ticks[0]);
        let Some(l) = self.lines.get_mut(&channel) else {
            return;
        };
        let role = l.role;
        let mut high = first_rising;
        for &t in ticks {
            l.state.change(t, high);
            high = !high;
        }
        if role == LineRole::Fault {
            // the rises: every other change, from the first when it rises
            let from = usize::from(!first_rising);
            for &t in ticks.iter().skip(from).step_by(2) {
                self.series.fault_rise(t as f64 * self.tick_ns() * 1e-9);
                if let Some(o) = self.onset(t, "fault line")
                    && self.onsets.len() < MAX_ONSETS
                {
                    self.onsets.push(o);
                }
            }
        }
        if role == LineRole::Heartbeat {
            self.heartbeat_onset = self.onset(ticks[ticks.len() - 1], "heartbeat stopped");
        }
    }

    fn on_count(&mut self, w: &Count) {
        self.advance(w.end_tick);
        if let Some(c) = self.clocks.get_mut(&w.channel) {
            c.state.count_window(
                w.reciprocal,
                w.gate_ticks,
                w.edges,
                w.samples,
                w.samples_high,
            );
        }
    }

    fn on_analog(&mut self, channel: u8, interval_ticks: u32, samples: &[Sample]) {
        self.advance(samples[0].tick);
        let tick_ns = self.tick_ns();
        let index = self.rails.keys().position(|&k| k == channel);
        if let (Some(r), Some(i)) = (self.rails.get_mut(&channel), index) {
            r.interval_s = f64::from(interval_ticks) * tick_ns * 1e-9;
            for s in samples {
                r.state.sample(s.tick, s.raw, s.mv, interval_ticks);
                let t_s = s.tick as f64 * tick_ns * 1e-9;
                self.series.rail_sample(i, t_s, s.mv, r.interval_s);
            }
        }
    }

    fn tick_ns(&self) -> f64 {
        self.probe.as_ref().map_or(1.0, |p| p.tick_ns)
    }

    /// The failure onset at `tick` (None before the first clock has a short run).
    fn onset(&self, tick: u64, cause: &str) -> Option<FaultOnset> {
        let c = self.clocks.values().next()?;
        let rail = self
            .rails
            .values()
            .filter_map(|r| r.state.last_mv.map(|m| (r.label.clone(), m)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        onset_at(tick, cause, &c.state, rail)
    }

    /// Histograms of the first clock (period, high, low) over a window, with the tick in ns.
    pub fn clock_histograms(&self, window: Window) -> Option<([DevHistogram; 3], f64)> {
        let c = self.clocks.values().next()?;
        let acc = c
            .blocks
            .merged(c.state.acc.as_ref(), window, ClockAcc::merge)?;
        Some((
            [acc.hist_period, acc.hist_high, acc.hist_low],
            c.state.tick_ns(),
        ))
    }

    /// Probe time of the latest event, s.
    pub fn snapshot_time_s(&self) -> f64 {
        self.now_tick as f64 * self.tick_ns() * 1e-9
    }

    /// Figures for a window at this moment.
    pub fn snapshot(&self, window: Window) -> Snapshot {
        let ppm = self.probe.as_ref().map_or(0, |p| p.timebase_ppm);
        let session = window == Window::Session;
        let clocks: Vec<ClockSnapshot> = self
            .clocks
            .iter()
            .map(|(id, c)| {
                let acc = c
                    .blocks
                    .merged(c.state.acc.as_ref(), window, ClockAcc::merge);
                clock::snapshot(
                    *id,
                    &c.label,
                    acc.as_ref(),
                    &c.state,
                    ppm,
                    session,
                    self.now_tick,
                )
            })
            .collect();
        let glitch_events = self.clock_events(|s| &s.glitch_events);
        let stall_events = self.clock_events(|s| &s.stall_events);
        let mut sag_events = Vec::new();
        let rails: Vec<RailSnapshot> = self
            .rails
            .iter()
            .map(|(id, r)| {
                let acc = r
                    .blocks
                    .merged(r.state.acc.as_ref(), window, RailAcc::merge);
                for s in r.state.sag_events.iter().rev().take(SNAPSHOT_SAGS) {
                    sag_events.push((r.label.clone(), *s));
                }
                rails::snapshot(*id, &r.label, acc.as_ref(), &r.state, r.interval_s)
            })
            .collect();
        sag_events.sort_by(|a, b| a.1.start_s.total_cmp(&b.1.start_s));
        let lines: Vec<LineSnapshot> = self
            .lines
            .iter()
            .map(|(id, l)| {
                let acc = l
                    .blocks
                    .merged(Some(&l.state.acc), window, LineAcc::merge)
                    .unwrap_or_else(LineState::empty_acc);
                lines::snapshot(*id, &l.label, l.role, &acc, &l.state, self.now_tick)
            })
            .collect();
        let worst_rail = rails
            .iter()
            .filter_map(|r| r.min_mv.map(|m| (r.name.clone(), m)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        let probe_time_s = self.snapshot_time_s();
        let window_s = match window {
            Window::Session => probe_time_s,
            Window::Recent => self.cfg.window_s.min(probe_time_s),
        };
        let fault_onsets = self.fault_onsets(&lines);
        let series = self.series_of(window, probe_time_s - window_s);
        Snapshot {
            window,
            window_s,
            probe_time_s,
            probe: self.probe.clone(),
            clocks,
            rails,
            lines,
            worst_rail,
            glitch_events,
            stall_events,
            sag_events,
            fault_onsets,
            series,
            trust: self.trust,
        }
    }

    /// The series of a window, with the first clock's short run so far.
    fn series_of(&self, window: Window, since_s: f64) -> Series {
        let since = (window == Window::Recent).then_some(since_s);
        match self
            .clocks
            .values()
            .next()
            .and_then(|c| c.state.current_run())
        {
            Some(run) => {
                let mut rec = self.series.clone();
                rec.add_run(&run);
                rec.series(since)
            }
            None => self.series.series(since),
        }
    }

    /// The newest events of a kind, from the first clock that has any.
    fn clock_events<T: Copy>(&self, list: impl Fn(&ClockState) -> &[T]) -> Vec<T> {
        self.clocks
            .values()
            .map(|c| list(&c.state))
            .find(|v| !v.is_empty())
            .map_or_else(Vec::new, |v| {
                v[v.len().saturating_sub(SNAPSHOT_EVENTS)..].to_vec()
            })
    }

    /// The fault-line onsets, or else a heartbeat silent for more than three of its intervals.
    fn fault_onsets(&self, lines: &[LineSnapshot]) -> Vec<FaultOnset> {
        let mut out = self.onsets.clone();
        if out.is_empty()
            && let Some(hb) = lines.iter().find(|l| l.role == LineRole::Heartbeat)
            && let (Some(rate), Some(since)) = (hb.rate_hz, hb.since_change_s)
            && since > 3.0 / (2.0 * rate)
            && let Some(on) = &self.heartbeat_onset
        {
            out.push(on.clone());
        }
        out
    }
}

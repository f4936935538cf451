//! The measurement engine: decoded probe events in, a [`Snapshot`] of measured timing out.
//! Pure and synchronous: no I/O, no knowledge of where events come from. Memory is bounded:
//! per channel one block per second of the recent window, a session total and capped event lists.

pub mod allan;
pub mod clock;
pub mod lines;
pub mod rails;
pub mod stats;

use std::collections::{BTreeMap, VecDeque};

use firmware_protocol::{
    Counters, FLAG_BURST_START, FLAG_LOST_BEFORE, Message, StreamDecoder, methods,
};
use serde::Serialize;

pub use clock::{ClockConfig, ClockSnapshot, Glitch, Stall};
pub use lines::{LineEvent, LineSnapshot};
pub use rails::{RailConfig, RailSnapshot, Sag};

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

/// The machine failed: the fault line rose. Figures at that moment.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FaultOnset {
    /// What showed the failure: "fault line" or "heartbeat stopped".
    pub cause: String,
    /// Probe time of the fault edge (or of the last heartbeat), s.
    pub at_s: f64,
    /// Clock frequency at the fault: the last observed cycles' frequency, extrapolated along
    /// the trend of the last two observations to the fault's time.
    pub frequency_hz: f64,
    /// Its uncertainty (k = 2.5): the frequency change between the last observation and the
    /// fault, plus the observations' own spread.
    pub frequency_uncertainty_hz: f64,
    /// Duty of the last observed cycles.
    pub duty: f64,
    /// Shortest high time of the last observed cycles, ns (± one tick).
    pub high_min_ns: f64,
    /// Shortest low time of the last observed cycles, ns (± one tick).
    pub low_min_ns: f64,
    /// The lowest rail's latest value at the fault (name, mV).
    pub rail: Option<(String, f64)>,
}

/// Which stretch of time a snapshot covers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Window {
    /// Everything since the start (or the last reset).
    Session,
    /// The recent window (`window_s`).
    Recent,
}

/// Counters that say how far the figures can be trusted.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct Trust {
    /// Frames accepted.
    pub frames: u64,
    /// Frames lost according to sequence numbers.
    pub lost_frames: u64,
    /// Frames with a CRC mismatch.
    pub crc_errors: u64,
    /// Other rejected byte runs (COBS, length, version).
    pub other_rejects: u64,
    /// Data messages flagged "lost before" by the probe.
    pub probe_lost_flags: u64,
    /// Probe-side overflow events (STATUS).
    pub probe_overflows: u64,
    /// Edges the probe dropped (STATUS).
    pub probe_edges_dropped: u64,
    /// Samples the probe dropped (STATUS).
    pub probe_samples_dropped: u64,
    /// Frames that passed the CRC but did not decode as a message.
    pub bad_messages: u64,
    /// Messages for channels the probe did not describe.
    pub unknown_channel: u64,
    /// Times the link came back.
    pub reconnects: u64,
}

impl Trust {
    /// Whether anything was lost or damaged.
    pub fn clean(&self) -> bool {
        self.lost_frames == 0
            && self.crc_errors == 0
            && self.other_rejects == 0
            && self.probe_lost_flags == 0
            && self.probe_edges_dropped == 0
            && self.probe_samples_dropped == 0
            && self.bad_messages == 0
    }
}

struct Blocks<A> {
    closed: VecDeque<(u64, A)>,
    session: Option<A>,
}

impl<A> Blocks<A> {
    fn new() -> Self {
        Blocks {
            closed: VecDeque::new(),
            session: None,
        }
    }
}

struct ClockChannel {
    label: String,
    state: clock::ClockState,
    blocks: Blocks<clock::ClockAcc>,
}

struct RailChannel {
    label: String,
    state: rails::RailState,
    blocks: Blocks<rails::RailAcc>,
    interval_s: f64,
}

struct LineChannel {
    label: String,
    role: LineRole,
    state: lines::LineState,
    blocks: Blocks<lines::LineAcc>,
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
    /// LOG lines from the probe (the most recent 64).
    pub logs: VecDeque<String>,
    onsets: Vec<FaultOnset>,
    /// Added to every tick: after a later HELLO (a probe restart or reconnection) the probe's
    /// ticks start again, and the engine's timeline must not run backwards.
    tick_offset: u64,
    seen_data: bool,
    /// The onset a stopped heartbeat would mean (captured at each heartbeat edge).
    heartbeat_onset: Option<FaultOnset>,
    /// Decoded ticks of the EDGES batch at hand (reused: no allocation per batch).
    tick_buf: Vec<u64>,
}

/// A figure set for one moment: every clock, rail and line, with the trust counters.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Snapshot {
    /// Which window.
    pub window: Window,
    /// Its length, s (session: probe time covered).
    pub window_s: f64,
    /// Probe time of the latest event, s.
    pub probe_time_s: f64,
    /// The probe.
    pub probe: Option<ProbeDesc>,
    /// Clocks.
    pub clocks: Vec<ClockSnapshot>,
    /// Rails.
    pub rails: Vec<RailSnapshot>,
    /// Lines.
    pub lines: Vec<LineSnapshot>,
    /// The rail with the lowest minimum (name, mV).
    pub worst_rail: Option<(String, f64)>,
    /// Recent glitches of the first clock.
    pub glitch_events: Vec<Glitch>,
    /// Recent stalls of the first clock.
    pub stall_events: Vec<Stall>,
    /// Recent sags (rail name, sag).
    pub sag_events: Vec<(String, Sag)>,
    /// Failures seen (fault line rising), oldest first.
    pub fault_onsets: Vec<FaultOnset>,
    /// Trust counters.
    pub trust: Trust,
}

impl Snapshot {
    /// The first clock channel's figures.
    pub fn clock(&self) -> Option<&ClockSnapshot> {
        self.clocks.first()
    }
    /// A rail by label.
    pub fn rail(&self, name: &str) -> Option<&RailSnapshot> {
        self.rails.iter().find(|r| r.name == name)
    }
    /// A line by role.
    pub fn line(&self, role: LineRole) -> Option<&LineSnapshot> {
        self.lines.iter().find(|l| l.role == role)
    }
}

impl Engine {
    /// An engine waiting for a probe's HELLO.
    pub fn new(cfg: EngineConfig) -> Engine {
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
            logs: VecDeque::new(),
            onsets: Vec::new(),
            tick_offset: 0,
            seen_data: false,
            heartbeat_onset: None,
            tick_buf: Vec::new(),
        }
    }

    /// Settings.
    pub fn config(&self) -> &EngineConfig {
        &self.cfg
    }

    /// The probe, once described.
    pub fn probe(&self) -> Option<&ProbeDesc> {
        self.probe.as_ref()
    }

    /// Forget all statistics (keeps the probe description).
    pub fn reset(&mut self) {
        let probe = self.probe.take();
        let trust = self.trust;
        *self = Engine {
            logs: std::mem::take(&mut self.logs),
            decoder_base: self.decoder_base,
            ..Engine::new(self.cfg.clone())
        };
        self.trust.reconnects = trust.reconnects;
        if let Some(p) = probe {
            self.install(p);
        }
    }

    /// The link came back: continuity is broken on every channel.
    pub fn note_reconnect(&mut self) {
        self.trust.reconnects += 1;
        self.break_all();
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
    pub fn on_decoder_counters(&mut self, c: &Counters) {
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
                    self.clocks.entry(c.id).or_insert_with(|| ClockChannel {
                        label: c.label.clone(),
                        state: clock::ClockState::new(self.cfg.clock.clone(), tick),
                        blocks: Blocks::new(),
                    });
                }
                ChannelKind::Analog => {
                    let mut rc = self.cfg.rail.clone();
                    if let Some(l) = self.cfg.rail_limits_mv.get(&c.label) {
                        rc.limit_mv = *l;
                    }
                    self.rails.entry(c.id).or_insert_with(|| RailChannel {
                        label: c.label.clone(),
                        state: rails::RailState::new(rc, c.scale, tick),
                        blocks: Blocks::new(),
                        interval_s: 0.0,
                    });
                }
                ChannelKind::Line => {
                    self.lines.entry(c.id).or_insert_with(|| LineChannel {
                        label: c.label.clone(),
                        role: LineRole::from_byte(c.info),
                        state: lines::LineState::new(tick, 1000),
                        blocks: Blocks::new(),
                    });
                }
            }
        }
        self.block_ticks = ((self.cfg.block_s * 1e9 / tick) as u64).max(1);
        self.probe = Some(p);
    }

    fn advance(&mut self, tick: u64) {
        if tick > self.now_tick {
            self.now_tick = tick;
        }
        if self.now_tick < self.block_start.saturating_add(self.block_ticks) {
            return;
        }
        // close the current block of every channel
        let start = self.block_start;
        let keep = (self.cfg.window_s / self.cfg.block_s).ceil() as usize;
        fn roll<A: Clone>(
            b: &mut Blocks<A>,
            acc: Option<A>,
            start: u64,
            keep: usize,
            merge: impl Fn(&mut A, &A),
        ) {
            if let Some(a) = acc {
                match &mut b.session {
                    Some(s) => merge(s, &a),
                    None => b.session = Some(a.clone()),
                }
                b.closed.push_back((start, a));
                while b.closed.len() > keep {
                    b.closed.pop_front();
                }
            }
        }
        for c in self.clocks.values_mut() {
            let acc = c.state.acc.take();
            roll(&mut c.blocks, acc, start, keep, clock::ClockAcc::merge);
        }
        for r in self.rails.values_mut() {
            let acc = r.state.acc.take();
            roll(&mut r.blocks, acc, start, keep, rails::RailAcc::merge);
        }
        for l in self.lines.values_mut() {
            let acc = std::mem::replace(&mut l.state.acc, lines::LineState::empty_acc());
            roll(&mut l.blocks, Some(acc), start, keep, lines::LineAcc::merge);
        }
        let n = (self.now_tick - self.block_start) / self.block_ticks;
        self.block_start += n * self.block_ticks;
    }

    /// Feed one decoded message.
    pub fn on_message(&mut self, m: &Message<'_>) {
        match m {
            Message::Hello(h) => {
                let desc = ProbeDesc::from_hello(h);
                if self.probe.as_ref() != Some(&desc) {
                    // a different probe (or the first): start over with its channels
                    let keep_logs = std::mem::take(&mut self.logs);
                    let base = self.decoder_base;
                    let trust = self.trust;
                    *self = Engine::new(self.cfg.clone());
                    self.logs = keep_logs;
                    self.decoder_base = base;
                    self.trust = trust;
                    self.install(desc);
                } else {
                    self.break_all();
                }
                if self.seen_data {
                    self.tick_offset = self.now_tick + 1;
                }
            }
            Message::Edges(e) => {
                if e.flags & FLAG_LOST_BEFORE != 0 {
                    self.trust.probe_lost_flags += 1;
                }
                self.seen_data = true;
                let off = self.tick_offset;
                self.advance(e.first_tick.saturating_add(off));
                let Some(c) = self.clocks.get_mut(&e.channel) else {
                    self.trust.unknown_channel += 1;
                    return;
                };
                if e.flags & (FLAG_LOST_BEFORE | FLAG_BURST_START) != 0 {
                    c.state.break_continuity();
                }
                let buf = &mut self.tick_buf;
                buf.resize(usize::from(e.count), 0);
                let n = e.ticks_into(buf);
                buf.truncate(n);
                if off != 0 {
                    buf.iter_mut().for_each(|t| *t = t.saturating_add(off));
                }
                c.state.edges(buf, e.first_rising);
                let last = buf
                    .last()
                    .copied()
                    .unwrap_or(e.first_tick.saturating_add(off));
                self.advance(last);
            }
            Message::Lines(e) => {
                self.seen_data = true;
                let off = self.tick_offset;
                self.advance(e.first_tick.saturating_add(off));
                let Some(l) = self.lines.get_mut(&e.channel) else {
                    self.trust.unknown_channel += 1;
                    return;
                };
                let mut high = e.first_rising;
                let mut rises = Vec::new();
                let mut beats = Vec::new();
                for t in e.ticks().map(|t| t.saturating_add(off)) {
                    l.state.change(t, high);
                    if high && l.role == LineRole::Fault {
                        rises.push(t);
                    }
                    if l.role == LineRole::Heartbeat {
                        beats.push(t);
                    }
                    high = !high;
                }
                for t in rises {
                    if let Some(o) = self.onset_at(t, "fault line")
                        && self.onsets.len() < 100
                    {
                        self.onsets.push(o);
                    }
                }
                if let Some(&t) = beats.last() {
                    self.heartbeat_onset = self.onset_at(t, "heartbeat stopped");
                }
            }
            Message::Count(w) => {
                self.seen_data = true;
                self.advance(
                    w.start_tick
                        .saturating_add(u64::from(w.gate_ticks))
                        .saturating_add(self.tick_offset),
                );
                let Some(c) = self.clocks.get_mut(&w.channel) else {
                    self.trust.unknown_channel += 1;
                    return;
                };
                c.state.count_window(
                    w.method == methods::RECIPROCAL,
                    w.gate_ticks,
                    w.edges,
                    w.samples,
                    w.samples_high,
                );
            }
            Message::Analog(a) => {
                if a.flags & FLAG_LOST_BEFORE != 0 {
                    self.trust.probe_lost_flags += 1;
                }
                self.seen_data = true;
                let off = self.tick_offset;
                self.advance(a.first_tick.saturating_add(off));
                let tick_ns = self.probe.as_ref().map_or(1.0, |p| p.tick_ns);
                let Some(r) = self.rails.get_mut(&a.channel) else {
                    self.trust.unknown_channel += 1;
                    return;
                };
                if a.flags & FLAG_LOST_BEFORE != 0 {
                    r.state.break_continuity();
                }
                r.interval_s = f64::from(a.interval_ticks) * tick_ns * 1e-9;
                let mut t = a.first_tick.saturating_add(off);
                for s in a.samples() {
                    r.state.sample(t, s, a.interval_ticks);
                    t = t.saturating_add(u64::from(a.interval_ticks));
                }
            }
            Message::Status(s) => {
                self.trust.probe_overflows = u64::from(s.overflows);
                self.trust.probe_edges_dropped = u64::from(s.edges_dropped);
                self.trust.probe_samples_dropped = u64::from(s.samples_dropped);
            }
            Message::Log(l) => {
                if self.logs.len() >= 64 {
                    self.logs.pop_front();
                }
                self.logs.push_back(l.text.to_string());
            }
            Message::Ack(_)
            | Message::Describe
            | Message::Start
            | Message::Stop
            | Message::Configure(_)
            | Message::Ping(_) => {}
        }
    }

    /// Histograms of the first clock (period, high, low) over a window, with the tick in ns.
    pub fn clock_histograms(&self, window: Window) -> Option<([stats::DevHistogram; 3], f64)> {
        let c = self.clocks.values().next()?;
        let acc = merged(
            &c.blocks,
            c.state.acc.as_ref(),
            window,
            clock::ClockAcc::merge,
        )?;
        Some((
            [acc.hist_period, acc.hist_high, acc.hist_low],
            c.state.tick_ns(),
        ))
    }

    /// Probe time of the latest event, s.
    pub fn snapshot_time_s(&self) -> f64 {
        self.now_tick as f64 * self.probe.as_ref().map_or(1.0, |p| p.tick_ns) * 1e-9
    }

    fn onset_at(&self, tick: u64, cause: &str) -> Option<FaultOnset> {
        let c = self.clocks.values().next()?;
        let q = c.state.tick_ns();
        let t = tick as f64 * q * 1e-9;
        // the newest observation with enough cycles, and the one before it
        let mut obs: Vec<clock::ShortRun> = c.state.runs.iter().flatten().copied().collect();
        if let Some(cur) = c.state.current_run()
            && cur.cycles >= 16
        {
            obs.push(cur);
        }
        let last = obs.last().copied()?;
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
                    clock::K
                        * (slope.abs() * ahead * 0.5 / 3f64.sqrt()).max(
                            last.frequency_hz * q * 1e-9 * last.frequency_hz
                                / last.cycles.max(1) as f64,
                        ),
                )
            }
            _ => (
                last.frequency_hz,
                clock::K * last.frequency_hz * q * 1e-9 * last.frequency_hz
                    / last.cycles.max(1) as f64,
            ),
        };
        let rail = self
            .rails
            .values()
            .filter_map(|r| r.state.last_mv.map(|m| (r.label.clone(), m)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
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

    /// A frame passed its CRC but its body did not decode.
    pub fn on_bad_message(&mut self) {
        self.trust.bad_messages += 1;
    }

    /// Figures for a window at this moment.
    pub fn snapshot(&self, window: Window) -> Snapshot {
        let tick_ns = self.probe.as_ref().map_or(1.0, |p| p.tick_ns);
        let ppm = self.probe.as_ref().map_or(0, |p| p.timebase_ppm);
        let mut glitch_events = Vec::new();
        let mut stall_events = Vec::new();
        let clocks: Vec<ClockSnapshot> = self
            .clocks
            .iter()
            .map(|(id, c)| {
                let acc = merged(
                    &c.blocks,
                    c.state.acc.as_ref(),
                    window,
                    clock::ClockAcc::merge,
                );
                // the first clock that has events supplies them
                if glitch_events.is_empty() {
                    glitch_events = newest(&c.state.glitch_events, 50);
                }
                if stall_events.is_empty() {
                    stall_events = newest(&c.state.stall_events, 50);
                }
                clock::snapshot(
                    *id,
                    &c.label,
                    acc.as_ref(),
                    &c.state,
                    ppm,
                    window == Window::Session,
                )
            })
            .collect();
        let mut sag_events = Vec::new();
        let rails: Vec<RailSnapshot> = self
            .rails
            .iter()
            .map(|(id, r)| {
                let acc = merged(
                    &r.blocks,
                    r.state.acc.as_ref(),
                    window,
                    rails::RailAcc::merge,
                );
                for s in r.state.sag_events.iter().rev().take(20) {
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
                let acc = merged(&l.blocks, Some(&l.state.acc), window, lines::LineAcc::merge)
                    .unwrap_or_else(lines::LineState::empty_acc);
                lines::snapshot(*id, &l.label, l.role, &acc, &l.state, self.now_tick)
            })
            .collect();
        let worst_rail = rails
            .iter()
            .filter_map(|r| r.min_mv.map(|m| (r.name.clone(), m)))
            .min_by(|a, b| a.1.total_cmp(&b.1));
        let probe_time_s = self.now_tick as f64 * tick_ns * 1e-9;
        let window_s = match window {
            Window::Session => probe_time_s,
            Window::Recent => self.cfg.window_s.min(probe_time_s),
        };
        let mut fault_onsets = self.onsets.clone();
        // a heartbeat silent for more than three of its intervals, with no fault line
        if fault_onsets.is_empty()
            && let Some(hb) = lines
                .iter()
                .find(|l: &&LineSnapshot| l.role == LineRole::Heartbeat)
            && let (Some(rate), Some(since)) = (hb.rate_hz, hb.since_change_s)
            && since > 3.0 / (2.0 * rate)
            && let Some(on) = &self.heartbeat_onset
        {
            fault_onsets.push(on.clone());
        }
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
            trust: self.trust,
        }
    }
}

/// A window's statistics: the session total, or the closed blocks of the recent window, plus
/// the current block.
fn merged<A: Clone>(
    b: &Blocks<A>,
    current: Option<&A>,
    window: Window,
    merge: impl Fn(&mut A, &A),
) -> Option<A> {
    let mut out: Option<A> = match window {
        Window::Session => b.session.clone(),
        Window::Recent => {
            let mut acc: Option<A> = None;
            for (_, a) in &b.closed {
                match &mut acc {
                    Some(x) => merge(x, a),
                    None => acc = Some(a.clone()),
                }
            }
            acc
        }
    };
    if let Some(c) = current {
        match &mut out {
            Some(x) => merge(x, c),
            None => out = Some(c.clone()),
        }
    }
    out
}

/// Raw bytes → frames → messages → engine: the one path for live, simulated and replayed data.
pub struct Feed {
    decoder: StreamDecoder,
    /// The engine.
    pub engine: Engine,
}

impl Feed {
    /// A feed into a new engine.
    pub fn new(cfg: EngineConfig) -> Feed {
        Feed {
            decoder: StreamDecoder::new(),
            engine: Engine::new(cfg),
        }
    }

    /// Bytes as received.
    pub fn push(&mut self, bytes: &[u8]) {
        let engine = &mut self.engine;
        self.decoder.push(bytes, |f| match Message::decode(&f) {
            Ok(m) => engine.on_message(&m),
            Err(_) => engine.on_bad_message(),
        });
        self.engine.on_decoder_counters(&self.decoder.counters);
    }

    /// The link came back (continuity broken, sequence tracking restarts).
    pub fn note_reconnect(&mut self) {
        self.decoder.reset_sequence();
        self.engine.note_reconnect();
    }

    /// The stream was joined mid-way (a recording started during a session): sequence
    /// tracking restarts, nothing is counted.
    pub fn restart_sequence(&mut self) {
        self.decoder.reset_sequence();
    }

    /// Decoder counters.
    pub fn counters(&self) -> Counters {
        self.decoder.counters
    }
}

/// The last `n` items, oldest first.
fn newest<T: Copy>(v: &[T], n: usize) -> Vec<T> {
    v[v.len().saturating_sub(n)..].to_vec()
}

//! The virtual probe's protocol side: bench model → frames, host commands → replies (pure).
//!
//! Channels: 0 CLK (edge: timestamps, count windows or window extremes by the probe class),
//! 1 HEARTBEAT, 2 FAULT, 3 RESET (lines), 4… one analog
//! channel per rail (12 bits, 2000 µV per count). Time advances in 1 ms slices of simulated time,
//! so the frames for a seed are the same whether written to a file or served live.

use firmware_protocol::{
    self as proto, Ack, Analog, Channel, ChannelKind, Channels, EdgeBatch, FLAG_BURST_START,
    FLAG_LOST_BEFORE, Hello, Log, MAX_BODY, MAX_WIRE, Message, Status, StreamDecoder, caps, params,
    results, roles, types,
};

use super::bench::{Bench, Slice};
use super::classes::{ClassInput, ClassSettings, DUTY_SAMPLES};
use super::model::{ADC_UV_PER_COUNT, BenchModel, ProbeClass};

/// Simulated time per step.
pub const SLICE_NS: f64 = 1e6;
/// A batch older than this (simulated time) is sent even if not full.
const FLUSH_NS: f64 = 10e6;
/// Firmware id the virtual probe reports.
pub const FIRMWARE_ID: &str = concat!("slackmeter-sim ", env!("CARGO_PKG_VERSION"));
/// Channel ids.
pub const CH_CLOCK: u8 = 0;
/// Heartbeat line channel.
pub const CH_HEARTBEAT: u8 = 1;
/// Fault line channel.
pub const CH_FAULT: u8 = 2;
/// Reset line channel.
pub const CH_RESET: u8 = 3;
/// First analog channel.
pub const CH_RAIL0: u8 = 4;

struct OpenEdges {
    body: Box<[u8; MAX_BODY]>,
    batch: Option<EdgeBatch>,
    opened_ns: f64,
    msg_type: u8,
    channel: u8,
    /// Level after the last edge written (to give the next batch its first polarity).
    level_after_last: bool,
    lost: bool,
    burst_start: bool,
}

impl OpenEdges {
    fn new(msg_type: u8, channel: u8) -> OpenEdges {
        OpenEdges {
            body: Box::new([0; MAX_BODY]),
            batch: None,
            opened_ns: 0.0,
            msg_type,
            channel,
            level_after_last: false,
            lost: false,
            burst_start: false,
        }
    }
}

struct OpenAnalog {
    channel: u8,
    first_tick: u64,
    samples: Vec<u16>,
    opened_ns: f64,
    lost: bool,
}

/// The virtual probe.
pub struct SimProbe {
    bench: Bench,
    slice: Slice,
    seq: u16,
    streaming: bool,
    out: Vec<u8>,
    clock: OpenEdges,
    lines: [OpenEdges; 3],
    analog: Vec<OpenAnalog>,
    interval_ticks: u32,
    tick_num_hz: u64,
    tick_den: u32,
    labels: Vec<String>,
    status: Status,
    status_interval_ns: f64,
    next_status_ns: f64,
    host: StreamDecoder,
    notes: Vec<String>,
    /// Edges simulated while streaming.
    pub edges_sent: u64,
    burst_left: u32,
    next_burst_ns: f64,
    class: ProbeClass,
    /// The clock input of a counting or extremes probe (None: stamping).
    class_input: Option<ClassInput>,
}

fn gcd(a: u64, b: u64) -> u64 {
    if b == 0 { a } else { gcd(b, a % b) }
}

impl SimProbe {
    /// A probe on the bench `model`, with `notes` (parameters, design) sent as LOG lines after HELLO.
    pub fn new(mut model: BenchModel, notes: Vec<String>) -> SimProbe {
        // the tick in whole picoseconds, so the tick rate is an exact fraction
        let tick_ps = (model.tick_ns * 1000.0).round().max(1.0) as u64;
        model.tick_ns = tick_ps as f64 / 1000.0;
        let g = gcd(1_000_000_000_000, tick_ps);
        let (tick_num_hz, tick_den) = (1_000_000_000_000 / g, (tick_ps / g) as u32);
        // an analog interval of a whole number of ticks
        let interval_ticks = ((1e9 / model.analog_rate_hz) / model.tick_ns)
            .round()
            .max(1.0) as u32;
        model.analog_rate_hz = 1e9 / (f64::from(interval_ticks) * model.tick_ns);
        let labels = model.rails.iter().map(|r| r.name.clone()).collect();
        let class = model.probe_class;
        let class_input = (class != ProbeClass::Stamping).then(|| {
            let ticks =
                |ns: f64| (ns / model.tick_ns).round().clamp(0.0, f64::from(u32::MAX)) as u32;
            let window_s = model.window_s.unwrap_or(class.default_window_s());
            let period = ticks(model.period_at_ns(0.0)).max(2);
            ClassInput::new(
                class,
                CH_CLOCK,
                ClassSettings {
                    window_ticks: ticks(window_s * 1e9).max(1),
                    high_threshold: model.high_threshold_ns.map_or(0, ticks),
                    low_threshold: model.low_threshold_ns.map_or(0, ticks),
                    duty_samples: DUTY_SAMPLES,
                    // 16 bins from half the nominal period, each an eighth of it wide
                    bins: (period / 2, (period / 8).max(1)),
                },
                model.seed ^ 0x5EED_C1A5_5000_0001,
            )
        });
        let analog = (0..model.rails.len())
            .map(|i| OpenAnalog {
                channel: CH_RAIL0 + i as u8,
                first_tick: 0,
                samples: Vec::with_capacity(500),
                opened_ns: 0.0,
                lost: false,
            })
            .collect();
        let mut p = SimProbe {
            bench: Bench::new(model),
            slice: Slice::default(),
            seq: 0,
            streaming: false,
            out: Vec::with_capacity(1 << 20),
            clock: OpenEdges::new(types::EDGES, CH_CLOCK),
            lines: [
                OpenEdges::new(types::LINES, CH_HEARTBEAT),
                OpenEdges::new(types::LINES, CH_FAULT),
                OpenEdges::new(types::LINES, CH_RESET),
            ],
            analog,
            interval_ticks,
            tick_num_hz,
            tick_den,
            labels,
            status: Status::default(),
            status_interval_ns: 1e9,
            next_status_ns: 1e9,
            host: StreamDecoder::new(),
            notes,
            edges_sent: 0,
            burst_left: 0,
            next_burst_ns: 0.0,
            class,
            class_input,
        };
        p.send_hello();
        let notes = std::mem::take(&mut p.notes);
        for n in &notes {
            for chunk in n.as_bytes().chunks(proto::message::MAX_LOG) {
                let text = String::from_utf8_lossy(chunk).into_owned();
                p.send(&Message::Log(Log {
                    level: 0,
                    text: &text,
                }));
            }
        }
        p.notes = notes;
        p
    }

    /// The model being simulated (tick rounded to whole picoseconds).
    pub fn model(&self) -> &BenchModel {
        &self.bench.model
    }

    /// Simulated time reached, ns.
    pub fn now_ns(&self) -> f64 {
        self.bench.now_ns()
    }

    /// Whether data messages are being sent (after START).
    pub fn streaming(&self) -> bool {
        self.streaming
    }

    /// Start streaming without waiting for a host START (file and stdout output).
    pub fn start(&mut self) {
        self.streaming = true;
        self.status.state = 1;
    }

    /// Wire bytes produced so far and not yet taken.
    pub fn output(&mut self) -> &mut Vec<u8> {
        &mut self.out
    }

    fn send(&mut self, m: &Message<'_>) {
        let mut body = [0u8; MAX_BODY];
        if let Ok(n) = m.encode_body(&mut body) {
            self.send_body(m.msg_type(), &body[..n]);
        }
    }

    fn send_body(&mut self, msg_type: u8, body: &[u8]) {
        emit(
            &mut self.out,
            &mut self.seq,
            &mut self.status,
            msg_type,
            body,
        );
    }

    fn send_hello(&mut self) {
        let clock_caps = match self.class {
            ProbeClass::Stamping => caps::TIMESTAMPS,
            ProbeClass::Counting => caps::COUNT_WINDOWS | caps::LEVEL_SAMPLING,
            ProbeClass::Extremes => caps::WINDOW_EXTREMES | caps::THRESHOLD_COUNTS,
        };
        let mut chans = vec![
            Channel::edge(CH_CLOCK, clock_caps, "CLK"),
            Channel::line(CH_HEARTBEAT, roles::HEARTBEAT, "HEARTBEAT"),
            Channel::line(CH_FAULT, roles::FAULT, "FAULT"),
            Channel::line(CH_RESET, roles::RESET, "RESET"),
        ];
        let labels = self.labels.clone();
        for (i, l) in labels.iter().enumerate() {
            chans.push(Channel {
                id: CH_RAIL0 + i as u8,
                kind: ChannelKind::Analog,
                info: 12,
                label: l,
                scale_num_uv: ADC_UV_PER_COUNT,
                scale_den: 1,
                offset_uv: 0,
            });
        }
        let hello = Message::Hello(Hello {
            protocol_version: proto::VERSION,
            probe_class: self.class.code(),
            tick_num_hz: self.tick_num_hz,
            tick_den: self.tick_den,
            timebase_ppm: 0,
            max_edge_rate_khz: 0,
            firmware: FIRMWARE_ID,
            channels: Channels::List(&chans),
        });
        // the numbering goes on across a HELLO (PROTOCOL.md §3): a host that reconnects
        // counts the frames its link lost meanwhile
        self.send(&hello);
    }

    /// Record that the transport dropped frames: the next batch of every channel says so.
    pub fn note_dropped(&mut self, frames: u32) {
        self.status.overflows = self.status.overflows.saturating_add(1);
        self.status.edges_dropped = self.status.edges_dropped.saturating_add(frames);
        self.clock.lost = true;
        if let Some(c) = &mut self.class_input {
            c.lost = true;
        }
        for l in &mut self.lines {
            l.lost = true;
        }
        for a in &mut self.analog {
            a.lost = true;
        }
    }

    /// Handle bytes from the host: commands are answered in the output.
    pub fn handle_host(&mut self, bytes: &[u8]) {
        let before = self.host.counters.rejected();
        let mut cmds: Vec<(u16, u8, Result<Message<'static>, ()>)> = Vec::new();
        self.host.push(bytes, |f| {
            let decoded = Message::decode(&f).map_err(|_| ()).map(|m| match m {
                Message::Describe => Message::Describe,
                Message::Start => Message::Start,
                Message::Stop => Message::Stop,
                Message::Configure(c) => Message::Configure(c),
                Message::Ping(n) => Message::Ping(n),
                // a probe → host type sent to the probe: treat as unknown
                _ => Message::Log(Log { level: 0, text: "" }),
            });
            cmds.push((f.header.seq, f.header.msg_type, decoded));
        });
        let bad = self.host.counters.rejected() - before;
        for _ in 0..bad {
            self.status.rx_bad_frames = self.status.rx_bad_frames.saturating_add(1);
            self.send(&Message::Ack(Ack {
                acked_seq: 0xFFFF,
                command: 0,
                result: results::BAD_FRAME,
                value: 0,
            }));
        }
        for (seq, ty, m) in cmds {
            let ack = |result, value| {
                Message::Ack(Ack {
                    acked_seq: seq,
                    command: ty,
                    result,
                    value,
                })
            };
            match m {
                Ok(Message::Describe) => self.send_hello(),
                Ok(Message::Start) => {
                    self.start();
                    self.send(&ack(results::OK, 0));
                }
                Ok(Message::Stop) => {
                    self.flush_all();
                    self.streaming = false;
                    self.status.state = 0;
                    self.send(&ack(results::OK, 0));
                }
                Ok(Message::Ping(n)) => self.send(&ack(results::OK, n)),
                Ok(Message::Configure(c)) => {
                    let (r, v) = self.configure(c.channel, c.param, c.value);
                    self.send(&ack(r, v));
                }
                Ok(_) => self.send(&ack(results::UNKNOWN_COMMAND, 0)),
                Err(()) => self.send(&ack(results::BAD_VALUE, 0)),
            }
        }
    }

    fn configure(&mut self, channel: u8, param: u8, value: u32) -> (u8, u32) {
        let known_channel =
            channel == params::PROBE || channel < CH_RAIL0 + self.analog.len() as u8;
        if !known_channel {
            return (results::BAD_CHANNEL, 0);
        }
        match param {
            params::ENABLE => (
                if value <= 1 {
                    results::OK
                } else {
                    results::BAD_VALUE
                },
                1,
            ),
            params::EDGE_MODE if channel == CH_CLOCK => {
                // each virtual probe observes the clock one way: its class's mode
                let mode = match self.class {
                    ProbeClass::Stamping => 0,
                    ProbeClass::Counting => 1,
                    ProbeClass::Extremes => 3,
                };
                if value == mode {
                    (results::OK, mode)
                } else {
                    (results::BAD_VALUE, mode)
                }
            }
            params::HIGH_THRESHOLD_TICKS | params::LOW_THRESHOLD_TICKS
                if channel == CH_CLOCK && self.class == ProbeClass::Extremes =>
            {
                let s = &mut self
                    .class_input
                    .as_mut()
                    .expect("an extremes input")
                    .settings;
                if param == params::HIGH_THRESHOLD_TICKS {
                    s.high_threshold = value;
                } else {
                    s.low_threshold = value;
                }
                (results::OK, value)
            }
            params::WINDOW_TICKS | params::GATE_TICKS
                if channel == CH_CLOCK && self.class != ProbeClass::Stamping =>
            {
                let s = &mut self.class_input.as_mut().expect("a class input").settings;
                if value == 0 {
                    (results::BAD_VALUE, s.window_ticks)
                } else {
                    s.window_ticks = value;
                    (results::OK, value)
                }
            }
            params::DUTY_SAMPLES if channel == CH_CLOCK && self.class == ProbeClass::Counting => {
                let s = &mut self
                    .class_input
                    .as_mut()
                    .expect("a counting input")
                    .settings;
                if value <= 100_000 {
                    s.duty_samples = value;
                    (results::OK, value)
                } else {
                    (results::BAD_VALUE, s.duty_samples)
                }
            }
            params::STATUS_INTERVAL_MS if channel == params::PROBE => {
                if (10..=60_000).contains(&value) {
                    self.status_interval_ns = f64::from(value) * 1e6;
                    (results::OK, value)
                } else {
                    (results::BAD_VALUE, (self.status_interval_ns / 1e6) as u32)
                }
            }
            params::SAMPLE_INTERVAL_TICKS if channel >= CH_RAIL0 && channel != params::PROBE => {
                (results::BAD_VALUE, self.interval_ticks)
            }
            _ => (results::BAD_PARAM, 0),
        }
    }

    /// Advance simulated time by whole slices until at least `until_ns`.
    pub fn run_until(&mut self, until_ns: f64) {
        while self.bench.now_ns() + SLICE_NS <= until_ns + 1e-6 {
            self.step();
        }
    }

    /// One slice of simulated time.
    pub fn step(&mut self) {
        let mut slice = std::mem::take(&mut self.slice);
        self.bench.advance(SLICE_NS, &mut slice);
        let now = self.bench.now_ns();
        if self.streaming
            && let Some(input) = &mut self.class_input
        {
            let tick_ns = self.bench.model.tick_ns;
            input.open_at(((now - SLICE_NS) / tick_ns) as u64);
            let before = input.cycles;
            let (out, seq, status) = (&mut self.out, &mut self.seq, &mut self.status);
            input.feed(
                &slice.clock,
                slice.clock_first_rising,
                (now / tick_ns) as u64,
                (SLICE_NS / tick_ns) as u64 + 1,
                &mut |ty, body| emit(out, seq, status, ty, body),
            );
            self.edges_sent += 2 * (input.cycles - before);
        }
        if self.streaming {
            let mut to = if self.class_input.is_some() {
                0
            } else {
                slice.clock.len()
            };
            if let Some(n) = self.bench.model.burst_edges {
                // bursts: stamp n consecutive edges, then nothing until the next burst is due
                if self.burst_left == 0 && now - SLICE_NS >= self.next_burst_ns {
                    self.burst_left = n;
                    self.next_burst_ns = now - SLICE_NS + self.bench.model.burst_every_s * 1e9;
                    Self::flush_edges(
                        &mut self.clock,
                        &mut self.out,
                        &mut self.seq,
                        &mut self.status,
                    );
                    self.clock.burst_start = true;
                }
                to = (self.burst_left as usize).min(slice.clock.len());
                self.burst_left -= to as u32;
            }
            self.edges_sent += to as u64;
            let first = slice.clock_first_rising;
            Self::push_edges(
                &mut self.clock,
                &slice.clock[..to],
                first,
                now,
                &mut self.out,
                &mut self.seq,
                &mut self.status,
            );
            if self.bench.model.burst_edges.is_some() && self.burst_left == 0 {
                Self::flush_edges(
                    &mut self.clock,
                    &mut self.out,
                    &mut self.seq,
                    &mut self.status,
                );
            }
            for (k, list) in [&slice.heartbeat, &slice.fault, &slice.reset]
                .into_iter()
                .enumerate()
            {
                for &(tick, level) in list {
                    Self::push_edges(
                        &mut self.lines[k],
                        &[tick],
                        level,
                        now,
                        &mut self.out,
                        &mut self.seq,
                        &mut self.status,
                    );
                }
            }
            for (i, (first_tick, samples)) in slice.rails.iter().enumerate() {
                self.push_analog(i, *first_tick, samples, now);
            }
            // age-based flushes
            if self.clock.batch.is_some() && now - self.clock.opened_ns >= FLUSH_NS {
                Self::flush_edges(
                    &mut self.clock,
                    &mut self.out,
                    &mut self.seq,
                    &mut self.status,
                );
            }
            for l in &mut self.lines {
                if l.batch.is_some() {
                    Self::flush_edges(l, &mut self.out, &mut self.seq, &mut self.status);
                }
            }
            for i in 0..self.analog.len() {
                if !self.analog[i].samples.is_empty() && now - self.analog[i].opened_ns >= FLUSH_NS
                {
                    self.flush_analog(i);
                }
            }
        }
        if now >= self.next_status_ns {
            self.next_status_ns += self.status_interval_ns;
            self.status.uptime_ticks = (now / self.bench.model.tick_ns) as u64;
            let s = self.status;
            self.send(&Message::Status(s));
        }
        self.slice = slice;
    }

    fn push_edges(
        open: &mut OpenEdges,
        ticks: &[u64],
        first_rising: bool,
        now: f64,
        out: &mut Vec<u8>,
        seq: &mut u16,
        status: &mut Status,
    ) {
        let mut level = first_rising;
        for &t in ticks {
            let pushed = match &mut open.batch {
                Some(b) => b.push(&mut open.body[..], t),
                None => false,
            };
            if !pushed {
                if open.batch.is_some() {
                    Self::flush_edges(open, out, seq, status);
                }
                let flags = if open.lost { FLAG_LOST_BEFORE } else { 0 }
                    | if open.burst_start {
                        FLAG_BURST_START
                    } else {
                        0
                    };
                open.lost = false;
                open.burst_start = false;
                open.batch = Some(EdgeBatch::start(
                    &mut open.body[..],
                    open.channel,
                    level,
                    flags,
                    t,
                ));
                open.opened_ns = now;
            }
            open.level_after_last = level;
            level = !level;
        }
    }

    fn flush_edges(open: &mut OpenEdges, out: &mut Vec<u8>, seq: &mut u16, status: &mut Status) {
        if let Some(b) = open.batch.take() {
            let n = b.finish(&mut open.body[..]);
            emit(out, seq, status, open.msg_type, &open.body[..n]);
        }
    }

    fn push_analog(&mut self, i: usize, first_tick: u64, samples: &[u16], now: f64) {
        let max = (MAX_BODY - 16) / 2;
        let mut tick = first_tick;
        for &s in samples {
            let a = &mut self.analog[i];
            if a.samples.len() == max {
                self.flush_analog(i);
            }
            let a = &mut self.analog[i];
            if a.samples.is_empty() {
                a.first_tick = tick;
                a.opened_ns = now;
            }
            a.samples.push(s);
            tick += u64::from(self.interval_ticks);
        }
    }

    fn flush_analog(&mut self, i: usize) {
        let a = &mut self.analog[i];
        if a.samples.is_empty() {
            return;
        }
        let mut raw = Vec::with_capacity(a.samples.len() * 2);
        for s in &a.samples {
            raw.extend_from_slice(&s.to_le_bytes());
        }
        let flags = if a.lost { FLAG_LOST_BEFORE } else { 0 };
        a.lost = false;
        let m = Message::Analog(Analog {
            channel: a.channel,
            flags,
            first_tick: a.first_tick,
            interval_ticks: self.interval_ticks,
            raw: &raw,
        });
        a.samples.clear();
        let mut body = [0u8; MAX_BODY];
        if let Ok(n) = m.encode_body(&mut body) {
            self.send_body(types::ANALOG, &body[..n]);
        }
    }

    /// Send every open batch now (end of a run), and every window that has ended.
    pub fn flush_all(&mut self) {
        if let Some(input) = &mut self.class_input {
            let now_tick = (self.bench.now_ns() / self.bench.model.tick_ns) as u64;
            let (out, seq, status) = (&mut self.out, &mut self.seq, &mut self.status);
            input.feed(&[], true, now_tick, 0, &mut |ty, body| {
                emit(out, seq, status, ty, body)
            });
        }
        Self::flush_edges(
            &mut self.clock,
            &mut self.out,
            &mut self.seq,
            &mut self.status,
        );
        for l in &mut self.lines {
            Self::flush_edges(l, &mut self.out, &mut self.seq, &mut self.status);
        }
        for i in 0..self.analog.len() {
            self.flush_analog(i);
        }
    }
}

/// Encode one frame onto the output, with the next sequence number, and count it.
fn emit(out: &mut Vec<u8>, seq: &mut u16, status: &mut Status, msg_type: u8, body: &[u8]) {
    let mut wire = [0u8; MAX_WIRE];
    if let Ok(n) = proto::encode_frame(msg_type, *seq, body, &mut wire) {
        out.extend_from_slice(&wire[..n]);
        *seq = seq.wrapping_add(1);
        status.frames_sent = status.frames_sent.wrapping_add(1);
    }
}

#[cfg(test)]
mod tests;

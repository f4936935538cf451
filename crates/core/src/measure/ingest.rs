//! The engine's checked front door: decoded protocol messages become validated [`Event`]s on
//! one timeline. Every tick is placed here, once, with checked arithmetic: after a later HELLO
//! of the same probe, ticks that go on keep the timeline and ticks that start again continue it
//! past everything seen; frames the link lost break continuity (never a stall); a batch
//! that would run past 2^64 ticks keeps what fits and breaks continuity, and a channel whose
//! time runs backwards breaks continuity. Data for channels the probe did not describe (or of
//! another kind) is refused. Nothing here panics, whatever the probe sends.

use firmware_protocol::{
    Analog, CountWindow, Edges, ExtremesWindow, FLAG_BURST_START, FLAG_LOST_BEFORE, Message,
    RawFrame, Violations, methods,
};

use crate::probe::{AnalogScale, ChannelKind, ProbeDesc};

/// Why continuity broke on a channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BreakCause {
    /// The probe flagged data lost just before.
    Lost,
    /// The probe stamps in bursts and did not stamp the edges since its previous batch.
    Burst,
    /// The channel's time ran backwards (or stood still) to this tick: a probe restart or bug.
    Reversal {
        /// The first tick after the break.
        to_tick: u64,
    },
    /// The probe's ticks ran past the end of the timeline (2^64): what followed was dropped.
    Overflow,
}

/// One calibrated analog sample.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Sample {
    /// When it was taken (engine timeline).
    pub tick: u64,
    /// The raw ADC count.
    pub raw: u16,
    /// The calibrated value, mV.
    pub mv: f64,
}

/// A count window of a clock channel.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Count {
    /// Channel id.
    pub channel: u8,
    /// Reciprocal (true) or gated counting.
    pub reciprocal: bool,
    /// Tick at the window's end (engine timeline).
    pub end_tick: u64,
    /// Gate length (gated) or measured span (reciprocal), ticks.
    pub gate_ticks: u32,
    /// Edges counted (gated) or cycles spanned (reciprocal).
    pub edges: u32,
    /// Level samples taken.
    pub samples: u32,
    /// Of those, samples that read high.
    pub samples_high: u32,
}

/// One window's extremes of every cycle of a clock channel (ticks; times on the engine's
/// timeline).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Extremes {
    /// Channel id.
    pub channel: u8,
    /// The probe flagged windows lost just before this one.
    pub lost_before: bool,
    /// Tick at which the window opened.
    pub start_tick: u64,
    /// Tick at which it closed (`start_tick` + its length).
    pub end_tick: u64,
    /// Cycles closed in it.
    pub cycles: u32,
    /// Shortest and longest high time.
    pub high: (u32, u32),
    /// Shortest and longest low time.
    pub low: (u32, u32),
    /// Shortest and longest period.
    pub period: (u32, u32),
    /// Sum of the high times.
    pub high_sum: u64,
    /// Sum of the low times.
    pub low_sum: u64,
}

/// Most short phases a [`ThresholdCount`] carries.
pub const MAX_SHORT_STAMPS: usize = 8;

/// One window's count of cycles shorter than the probe's thresholds (ticks; engine timeline).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ThresholdCount {
    /// Channel id.
    pub channel: u8,
    /// Tick at which the window opened.
    pub start_tick: u64,
    /// Tick at which it closed.
    pub end_tick: u64,
    /// High-time threshold in force (0: off).
    pub high_threshold: u32,
    /// Low-time threshold in force (0: off).
    pub low_threshold: u32,
    /// Cycles whose high time was shorter.
    pub high_short: u32,
    /// Cycles whose low time was shorter.
    pub low_short: u32,
    /// The first short phases: (tick of the opening edge, length, high phase).
    pub stamps: [(u64, u32, bool); MAX_SHORT_STAMPS],
    /// How many of `stamps` are filled.
    pub stamp_count: u8,
}

/// One validated step of the probe's stream. Ticks are on the engine's timeline: strictly
/// increasing within a batch, and a channel's next batch starts after its last one unless a
/// [`Event::Break`] comes first.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Event<'a> {
    /// The probe described itself: a different probe (or the first) when `new` (everything
    /// starts over), else the same one again (continuity breaks).
    Probe {
        /// The description.
        desc: &'a ProbeDesc,
        /// Whether it differs from the one before.
        new: bool,
    },
    /// Continuity broke on a channel: what follows does not continue what came before.
    Break {
        /// Channel id.
        channel: u8,
        /// Why.
        cause: BreakCause,
    },
    /// The link came back: continuity broke on every channel.
    Reconnect,
    /// Frames the link lost just before this point (sequence numbers missing): continuity
    /// broke on every channel. Not a stall of the clock: the data is missing, not the edges.
    LinkGap {
        /// Frames missing.
        frames: u16,
    },
    /// Edge timestamps of a clock channel, polarities alternating from `first_rising`.
    Edges {
        /// Channel id.
        channel: u8,
        /// Whether the first edge rises.
        first_rising: bool,
        /// Ticks, strictly increasing.
        ticks: &'a [u64],
    },
    /// Changes of a line channel, levels alternating from `first_rising`.
    Lines {
        /// Channel id.
        channel: u8,
        /// Whether the first change rises.
        first_rising: bool,
        /// Ticks, strictly increasing.
        ticks: &'a [u64],
    },
    /// A count window.
    Count(Count),
    /// One window's extremes of every cycle.
    Extremes(Extremes),
    /// One window's count of cycles shorter than the thresholds.
    Thresholds(ThresholdCount),
    /// Samples of an analog channel, `interval_ticks` apart.
    Analog {
        /// Channel id.
        channel: u8,
        /// Ticks between samples.
        interval_ticks: u32,
        /// The samples, in time order.
        samples: &'a [Sample],
    },
    /// The probe's loss counters (totals since it started).
    Status {
        /// Buffer overflow events.
        overflows: u16,
        /// Edges it could not record.
        edges_dropped: u32,
        /// Samples it could not record.
        samples_dropped: u32,
    },
    /// A log line from the probe.
    Log(&'a str),
    /// A data message for a channel the probe did not describe as that kind (refused).
    Unknown {
        /// Channel id.
        channel: u8,
        /// Whether the probe flagged data lost before it.
        lost_before: bool,
    },
    /// A frame passed its CRC but its body did not decode.
    Undecodable,
}

/// What the probe's description says about one channel id. An id described twice (under two
/// kinds) is one channel to the timeline: its streams share the reversal check and its breaks.
#[derive(Clone, Copy, Debug, Default)]
struct Slot {
    edge: bool,
    line: bool,
    /// The first analog channel's calibration.
    analog: Option<AnalogScale>,
    /// The last tick delivered on this channel's edge, line or sample stream.
    last: Option<u64>,
}

/// The ingest step's state: the probe description, the timeline and reused buffers.
pub(crate) struct Ingest {
    probe: Option<ProbeDesc>,
    slots: Box<[Slot; 256]>,
    /// Added to every probe tick (None: the timeline is used up).
    offset: Option<u64>,
    /// The latest tick delivered on any channel.
    newest: u64,
    seen_data: bool,
    /// The same probe said HELLO again: whether its ticks went on or started again is decided
    /// by its next data.
    rebase_pending: bool,
    ticks: Vec<u64>,
    samples: Vec<Sample>,
}

impl Ingest {
    /// Waiting for a probe's HELLO.
    pub(crate) fn new() -> Ingest {
        Ingest {
            probe: None,
            slots: Box::new([Slot::default(); 256]),
            offset: Some(0),
            newest: 0,
            seen_data: false,
            rebase_pending: false,
            ticks: Vec::new(),
            samples: Vec::new(),
        }
    }

    /// One frame that passed its CRC: its events to `emit`, in order.
    pub(crate) fn frame(&mut self, f: &RawFrame<'_>, mut emit: impl FnMut(&Event<'_>)) {
        if f.lost_before > 0 {
            emit(&Event::LinkGap {
                frames: f.lost_before,
            });
        }
        match Message::decode(f) {
            Ok(m) => self.message(&m, emit),
            Err(_) => emit(&Event::Undecodable),
        }
    }

    /// The link came back.
    pub(crate) fn reconnect(&mut self, mut emit: impl FnMut(&Event<'_>)) {
        emit(&Event::Reconnect);
    }

    fn message(&mut self, m: &Message<'_>, mut emit: impl FnMut(&Event<'_>)) {
        match m {
            Message::Hello(h) => self.hello(ProbeDesc::from_hello(h), emit),
            Message::Edges(e) => self.stamps(e, false, emit),
            Message::Lines(e) => self.stamps(e, true, emit),
            Message::Count(w) => self.count(w, emit),
            Message::Extremes(x) => self.extremes(x, emit),
            Message::Violations(v) => self.violations(v, emit),
            Message::Analog(a) => self.analog(a, emit),
            Message::Status(s) => emit(&Event::Status {
                overflows: s.overflows,
                edges_dropped: s.edges_dropped,
                samples_dropped: s.samples_dropped,
            }),
            Message::Log(l) => emit(&Event::Log(l.text)),
            Message::Ack(_)
            | Message::Describe
            | Message::Start
            | Message::Stop
            | Message::Configure(_)
            | Message::Ping(_) => {}
        }
    }

    fn hello(&mut self, desc: ProbeDesc, mut emit: impl FnMut(&Event<'_>)) {
        let new = self.probe.as_ref() != Some(&desc);
        if new {
            // a different probe: its own timeline from zero
            *self = Ingest {
                ticks: std::mem::take(&mut self.ticks),
                samples: std::mem::take(&mut self.samples),
                ..Ingest::new()
            };
            for c in &desc.channels {
                let s = &mut self.slots[usize::from(c.id)];
                match c.kind {
                    ChannelKind::Edge => s.edge = true,
                    ChannelKind::Line => s.line = true,
                    ChannelKind::Analog => {
                        s.analog.get_or_insert(c.scale);
                    }
                }
            }
        } else if self.seen_data {
            // the same probe again: restarted (its ticks start again) or still running (a
            // reconnect, a DESCRIBE): its next data tells
            self.rebase_pending = true;
        }
        let desc = self.probe.insert(desc);
        emit(&Event::Probe { desc, new });
    }

    /// The first data after the same probe's HELLO, at probe tick `first`: ticks that go on
    /// past everything seen keep the timeline (the probe kept running: what the link missed
    /// is a gap, not a restart); ticks that start again are placed after everything seen.
    fn settle(&mut self, first: u64) {
        if std::mem::take(&mut self.rebase_pending) {
            let on = self
                .offset
                .and_then(|o| first.checked_add(o))
                .is_some_and(|t| t > self.newest);
            if !on {
                self.offset = self.newest.checked_add(1);
            }
        }
    }

    /// Data delivered on `channel` up to `last`: the channel's and the timeline's newest tick.
    fn delivered(&mut self, channel: u8, last: u64) {
        self.slots[usize::from(channel)].last = Some(last);
        self.newest = self.newest.max(last);
        self.seen_data = true;
    }

    /// A break when `first` does not come after the channel's last tick.
    fn reversal(&self, channel: u8, first: u64) -> Option<Event<'static>> {
        let last = self.slots[usize::from(channel)].last?;
        (first <= last).then_some(Event::Break {
            channel,
            cause: BreakCause::Reversal { to_tick: first },
        })
    }

    /// EDGES (`lines` false) or LINES.
    fn stamps(&mut self, e: &Edges<'_>, lines: bool, mut emit: impl FnMut(&Event<'_>)) {
        let slot = self.slots[usize::from(e.channel)];
        let channel = e.channel;
        if !(if lines { slot.line } else { slot.edge }) {
            let lost_before = !lines && e.flags & FLAG_LOST_BEFORE != 0;
            emit(&Event::Unknown {
                channel,
                lost_before,
            });
            return;
        }
        self.settle(e.first_tick);
        let mut buf = std::mem::take(&mut self.ticks);
        buf.resize(usize::from(e.count), 0);
        let n = e.ticks_into(&mut buf);
        buf.truncate(n);
        let single_byte = e.deltas.len() + 1 == usize::from(e.count);
        let fit = place(&mut buf, self.offset, single_byte);
        if !lines && e.flags & (FLAG_LOST_BEFORE | FLAG_BURST_START) != 0 {
            let cause = if e.flags & FLAG_LOST_BEFORE != 0 {
                BreakCause::Lost
            } else {
                BreakCause::Burst
            };
            emit(&Event::Break { channel, cause });
        }
        if fit > 0 {
            let ticks = &buf[..fit];
            if let Some(b) = self.reversal(channel, ticks[0]) {
                emit(&b);
            }
            let first_rising = e.first_rising;
            emit(&if lines {
                Event::Lines {
                    channel,
                    first_rising,
                    ticks,
                }
            } else {
                Event::Edges {
                    channel,
                    first_rising,
                    ticks,
                }
            });
            self.delivered(channel, ticks[fit - 1]);
        }
        if fit < n {
            emit(&Event::Break {
                channel,
                cause: BreakCause::Overflow,
            });
        }
        self.ticks = buf;
    }

    fn count(&mut self, w: &CountWindow, mut emit: impl FnMut(&Event<'_>)) {
        let channel = w.channel;
        if !self.slots[usize::from(channel)].edge {
            emit(&Event::Unknown {
                channel,
                lost_before: false,
            });
            return;
        }
        self.settle(w.start_tick);
        let end = w
            .start_tick
            .checked_add(u64::from(w.gate_ticks))
            .zip(self.offset)
            .and_then(|(t, off)| t.checked_add(off));
        let Some(end_tick) = end else {
            emit(&Event::Break {
                channel,
                cause: BreakCause::Overflow,
            });
            return;
        };
        // a window overlaps the edges stamped in it: it neither checks nor moves the channel's
        // last tick
        self.newest = self.newest.max(end_tick);
        self.seen_data = true;
        emit(&Event::Count(Count {
            channel,
            reciprocal: w.method == methods::RECIPROCAL,
            end_tick,
            gate_ticks: w.gate_ticks,
            edges: w.edges,
            samples: w.samples,
            samples_high: w.samples_high,
        }));
    }

    /// A window of a clock channel on the timeline: its start and end tick (None: it would run
    /// past 2^64, and a break was emitted; or the channel is not a clock, and that was said).
    fn window(
        &mut self,
        channel: u8,
        start: u64,
        ticks: u32,
        emit: &mut impl FnMut(&Event<'_>),
    ) -> Option<(u64, u64)> {
        if !self.slots[usize::from(channel)].edge {
            emit(&Event::Unknown {
                channel,
                lost_before: false,
            });
            return None;
        }
        self.settle(start);
        let placed = self.offset.and_then(|off| {
            let s = start.checked_add(off)?;
            Some((s, s.checked_add(u64::from(ticks))?))
        });
        let Some((s, e)) = placed else {
            emit(&Event::Break {
                channel,
                cause: BreakCause::Overflow,
            });
            return None;
        };
        self.newest = self.newest.max(e);
        self.seen_data = true;
        Some((s, e))
    }

    fn extremes(&mut self, x: &ExtremesWindow<'_>, mut emit: impl FnMut(&Event<'_>)) {
        let Some((start_tick, end_tick)) =
            self.window(x.channel, x.start_tick, x.window_ticks, &mut emit)
        else {
            return;
        };
        let lost_before = x.flags & FLAG_LOST_BEFORE != 0;
        if lost_before {
            emit(&Event::Break {
                channel: x.channel,
                cause: BreakCause::Lost,
            });
        }
        emit(&Event::Extremes(Extremes {
            channel: x.channel,
            lost_before,
            start_tick,
            end_tick,
            cycles: x.cycles,
            high: (x.high_min_ticks, x.high_max_ticks),
            low: (x.low_min_ticks, x.low_max_ticks),
            period: (x.period_min_ticks, x.period_max_ticks),
            high_sum: x.high_sum_ticks,
            low_sum: x.low_sum_ticks,
        }));
    }

    fn violations(&mut self, v: &Violations<'_>, mut emit: impl FnMut(&Event<'_>)) {
        let Some((start_tick, end_tick)) =
            self.window(v.channel, v.start_tick, v.window_ticks, &mut emit)
        else {
            return;
        };
        let off = start_tick - v.start_tick;
        let mut stamps = [(0u64, 0u32, false); MAX_SHORT_STAMPS];
        let mut n = 0u8;
        for (slot, p) in stamps.iter_mut().zip(v.short_phases()) {
            // a stamp the offset would carry past 2^64 is left out
            if let Some(t) = p.tick.checked_add(off) {
                *slot = (t, p.length_ticks, p.high);
                n += 1;
            }
        }
        emit(&Event::Thresholds(ThresholdCount {
            channel: v.channel,
            start_tick,
            end_tick,
            high_threshold: v.high_threshold_ticks,
            low_threshold: v.low_threshold_ticks,
            high_short: v.high_short,
            low_short: v.low_short,
            stamps,
            stamp_count: n,
        }));
    }

    fn analog(&mut self, a: &Analog<'_>, mut emit: impl FnMut(&Event<'_>)) {
        let channel = a.channel;
        let lost_before = a.flags & FLAG_LOST_BEFORE != 0;
        let Some(scale) = self.slots[usize::from(channel)].analog else {
            emit(&Event::Unknown {
                channel,
                lost_before,
            });
            return;
        };
        if lost_before {
            emit(&Event::Break {
                channel,
                cause: BreakCause::Lost,
            });
        }
        self.settle(a.first_tick);
        let first = self.offset.and_then(|off| a.first_tick.checked_add(off));
        let step = u64::from(a.interval_ticks);
        // the samples whose tick stays below 2^64 (the interval is at least 1)
        let fit = first.map_or(0, |f| {
            usize::try_from((u64::MAX - f) / step.max(1))
                .map_or(usize::MAX, |k| k.saturating_add(1))
                .min(a.count())
        });
        if let Some(t0) = first
            && fit > 0
        {
            if let Some(b) = self.reversal(channel, t0) {
                emit(&b);
            }
            let mut buf = std::mem::take(&mut self.samples);
            buf.clear();
            let mut tick = t0;
            buf.extend(a.samples().take(fit).map(|raw| {
                let s = Sample {
                    tick,
                    raw,
                    mv: scale.mv(f64::from(raw)),
                };
                tick = tick.wrapping_add(step);
                s
            }));
            emit(&Event::Analog {
                channel,
                interval_ticks: a.interval_ticks,
                samples: &buf,
            });
            self.delivered(channel, buf[fit - 1].tick);
            self.samples = buf;
        }
        if fit < a.count() {
            emit(&Event::Break {
                channel,
                cause: BreakCause::Overflow,
            });
        }
    }
}

/// Adds `offset` to a batch's decoded ticks (decoded with wrapping arithmetic; every delta is at
/// least 1 and below 2^63) and returns how many of them stay on the timeline: the prefix that
/// neither wrapped nor ran past 2^64 with the offset.
fn place(ticks: &mut [u64], offset: Option<u64>, single_byte: bool) -> usize {
    let (Some(off), Some(&first), Some(&last)) = (offset, ticks.first(), ticks.last()) else {
        return 0;
    };
    let n = ticks.len();
    // single-byte deltas add at most 127 each: when even that stays below 2^64 nothing wrapped
    let clear = if single_byte {
        first
            .checked_add(off)
            .and_then(|t| t.checked_add(127 * (n as u64 - 1)))
            .is_some()
    } else {
        // a wrap shows as a tick not above the one before
        ticks.windows(2).all(|w| w[0] < w[1]) && last.checked_add(off).is_some()
    };
    if clear {
        if off != 0 {
            ticks.iter_mut().for_each(|t| *t += off);
        }
        return n;
    }
    let mut prev = None;
    for (i, t) in ticks.iter_mut().enumerate() {
        if prev.is_some_and(|p| *t <= p) {
            return i;
        }
        prev = Some(*t);
        match t.checked_add(off) {
            Some(v) => *t = v,
            None => return i,
        }
    }
    n
}

/// A HELLO frame of a 125 MHz probe with these channels, appended to `out` (for tests).
#[cfg(test)]
pub(super) fn hello_frame(out: &mut Vec<u8>, channels: &[firmware_protocol::Channel<'_>]) {
    use firmware_protocol::{Channels, Hello, MAX_WIRE, encode_message};
    let m = Message::Hello(Hello {
        protocol_version: 1,
        probe_class: 0,
        tick_num_hz: 125_000_000,
        tick_den: 1,
        timebase_ppm: 0,
        max_edge_rate_khz: 0,
        firmware: "t",
        channels: Channels::List(channels),
    });
    let mut wire = [0u8; MAX_WIRE];
    let n = encode_message(&m, 0, &mut wire).expect("a valid HELLO");
    out.extend_from_slice(&wire[..n]);
}

#[cfg(test)]
mod tests;

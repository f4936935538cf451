//! Message bodies: encoding into a byte buffer and zero-copy decoding from a frame.
//!
//! Little-endian fixed fields; timestamps as a 64-bit first tick followed by unsigned LEB128
//! deltas (minimal encoding, at most 9 bytes each). Layouts are specified in PROTOCOL.md.

use crate::frame::{MAX_BODY, RawFrame};

/// Message type codes. Probe → host below 0x40, host → probe from 0x40.
pub mod types {
    /// Probe self-description.
    pub const HELLO: u8 = 0x01;
    /// Edge timestamps of an edge channel.
    pub const EDGES: u8 = 0x02;
    /// Count window (gated or reciprocal count, level samples).
    pub const COUNT: u8 = 0x03;
    /// Analog sample batch.
    pub const ANALOG: u8 = 0x04;
    /// Line change events (reset, fault, heartbeat…), same layout as EDGES.
    pub const LINES: u8 = 0x05;
    /// Probe status and loss counters.
    pub const STATUS: u8 = 0x06;
    /// Acknowledgement of a host command.
    pub const ACK: u8 = 0x07;
    /// Free text from the probe.
    pub const LOG: u8 = 0x08;
    /// Host asks for HELLO.
    pub const DESCRIBE: u8 = 0x41;
    /// Host starts streaming.
    pub const START: u8 = 0x42;
    /// Host stops streaming.
    pub const STOP: u8 = 0x43;
    /// Host sets one parameter.
    pub const CONFIGURE: u8 = 0x44;
    /// Host checks the link.
    pub const PING: u8 = 0x45;
}

/// Channel kinds in HELLO.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[repr(u8)]
pub enum ChannelKind {
    /// A clock input: edges timestamped and/or counted.
    Edge = 1,
    /// A slow logic line (reset, fault, heartbeat): change events.
    Line = 2,
    /// An analog input (a supply rail): raw ADC samples with a scale to µV.
    Analog = 3,
}

/// Edge channel capability bits (HELLO `info` byte of an edge channel).
pub mod caps {
    /// Timestamps every edge (EDGES messages).
    pub const TIMESTAMPS: u8 = 1;
    /// Counts edges over gates (COUNT messages).
    pub const COUNT_WINDOWS: u8 = 2;
    /// Samples the level at pseudo-random times (COUNT `samples`/`samples_high`).
    pub const LEVEL_SAMPLING: u8 = 4;
}

/// Line roles (HELLO `info` byte of a line channel).
pub mod roles {
    /// Any other line.
    pub const OTHER: u8 = 0;
    /// The machine's reset line.
    pub const RESET: u8 = 1;
    /// A fault line raised when a self-test check fails.
    pub const FAULT: u8 = 2;
    /// A heartbeat toggled by the machine's self-test loop.
    pub const HEARTBEAT: u8 = 3;
}

/// One channel of the probe.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Channel<'a> {
    /// Channel id used in data messages.
    pub id: u8,
    /// Kind.
    pub kind: ChannelKind,
    /// Edge: capability bits; line: role; analog: ADC resolution in bits.
    pub info: u8,
    /// Label, e.g. "CLK", "FAULT", "VCC_FAR" (UTF-8, ≤ 16 bytes).
    pub label: &'a str,
    /// Analog only: µV = raw × scale_num_uv / scale_den + offset_uv.
    pub scale_num_uv: i32,
    /// Analog only: denominator of the scale (≥ 1).
    pub scale_den: u32,
    /// Analog only: offset in µV.
    pub offset_uv: i32,
}

impl<'a> Channel<'a> {
    /// An edge input with these capability bits ([`caps`]); no analog scale.
    pub const fn edge(id: u8, capabilities: u8, label: &'a str) -> Self {
        Self::digital(id, ChannelKind::Edge, capabilities, label)
    }

    /// A line input with this role ([`roles`]); no analog scale.
    pub const fn line(id: u8, role: u8, label: &'a str) -> Self {
        Self::digital(id, ChannelKind::Line, role, label)
    }

    const fn digital(id: u8, kind: ChannelKind, info: u8, label: &'a str) -> Self {
        Self {
            id,
            kind,
            info,
            label,
            scale_num_uv: 0,
            scale_den: 1,
            offset_uv: 0,
        }
    }
}

/// Channel list of a HELLO: borrowed from a frame, or given for encoding.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Channels<'a> {
    /// Encoded descriptors (validated) and their count.
    Raw(&'a [u8], u8),
    /// Descriptors to encode.
    List(&'a [Channel<'a>]),
}

/// Probe self-description.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Hello<'a> {
    /// Protocol version the probe implements.
    pub protocol_version: u8,
    /// Tick rate numerator: tick rate = tick_num_hz / tick_den Hz.
    pub tick_num_hz: u64,
    /// Tick rate denominator (≥ 1).
    pub tick_den: u32,
    /// Stated timebase accuracy in ppm (0 = unknown).
    pub timebase_ppm: u16,
    /// Highest edge rate timestamped without loss, in kHz (0 = unknown).
    pub max_edge_rate_khz: u32,
    /// Firmware id (UTF-8, ≤ 32 bytes).
    pub firmware: &'a str,
    /// Channels.
    pub channels: Channels<'a>,
}

/// Timestamps of edges (EDGES) or line changes (LINES).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Edges<'a> {
    /// Channel id.
    pub channel: u8,
    /// Level after the first edge (true: the first edge rises). Edges alternate.
    pub first_rising: bool,
    /// Bit 0: edges were lost just before this batch.
    pub flags: u8,
    /// Number of timestamps (≥ 1).
    pub count: u16,
    /// Tick of the first edge.
    pub first_tick: u64,
    /// `count − 1` LEB128 deltas (validated when decoded).
    pub deltas: &'a [u8],
}

/// Flag: data was lost just before this batch.
pub const FLAG_LOST_BEFORE: u8 = 1;
/// Flag (EDGES): the probe stamps in bursts and did not stamp the edges since the previous
/// batch by design (sampling, not loss): no interval spans the gap.
pub const FLAG_BURST_START: u8 = 2;

impl<'a> Edges<'a> {
    /// Timestamps in ticks, in order.
    pub fn ticks(&self) -> Ticks<'a> {
        Ticks {
            next: Some(self.first_tick),
            rest: self.deltas,
        }
    }

    /// Writes the timestamps into `out` (as many as fit) and returns how many: for a decoded
    /// (validated) message the same values as [`Edges::ticks`], with a tight loop when every
    /// delta is one byte (the usual case).
    pub fn ticks_into(&self, out: &mut [u64]) -> usize {
        let n = out.len().min(usize::from(self.count));
        if n == 0 {
            return 0;
        }
        if self.deltas.len() + 1 == usize::from(self.count) {
            // validated at decoding: count − 1 deltas in count − 1 bytes are all single bytes
            let mut t = self.first_tick;
            out[0] = t;
            for (o, &d) in out[1..n].iter_mut().zip(self.deltas) {
                t = t.wrapping_add(u64::from(d));
                *o = t;
            }
            return n;
        }
        let mut written = 0;
        for (o, t) in out[..n].iter_mut().zip(self.ticks()) {
            *o = t;
            written += 1;
        }
        written
    }
}

/// Iterator over the timestamps of an [`Edges`].
#[derive(Clone, Debug)]
pub struct Ticks<'a> {
    next: Option<u64>,
    rest: &'a [u8],
}

impl Iterator for Ticks<'_> {
    type Item = u64;
    #[inline]
    fn next(&mut self) -> Option<u64> {
        let cur = self.next?;
        self.next = match unsigned_varint::decode::u64(self.rest) {
            Ok((d, rest)) => {
                self.rest = rest;
                Some(cur.wrapping_add(d))
            }
            Err(_) => None,
        };
        Some(cur)
    }
}

/// Count-window methods.
pub mod methods {
    /// Rising edges counted over a gate of `gate_ticks`.
    pub const GATED: u8 = 0;
    /// `edges` input cycles took exactly `gate_ticks` (first to last counted edge).
    pub const RECIPROCAL: u8 = 1;
}

/// A count window.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct CountWindow {
    /// Channel id.
    pub channel: u8,
    /// See [`methods`].
    pub method: u8,
    /// Tick at the start of the window.
    pub start_tick: u64,
    /// Gate length (gated) or measured span (reciprocal), in ticks.
    pub gate_ticks: u32,
    /// Edges counted (gated) or cycles spanned (reciprocal).
    pub edges: u32,
    /// Level samples taken (0: none).
    pub samples: u32,
    /// Of those, samples that read high.
    pub samples_high: u32,
}

/// A batch of analog samples.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Analog<'a> {
    /// Channel id.
    pub channel: u8,
    /// Bit 0: samples were lost just before this batch.
    pub flags: u8,
    /// Tick of the first sample.
    pub first_tick: u64,
    /// Ticks between samples (≥ 1).
    pub interval_ticks: u32,
    /// Raw samples, u16 LE each.
    pub raw: &'a [u8],
}

impl Analog<'_> {
    /// Number of samples.
    pub fn count(&self) -> usize {
        self.raw.len() / 2
    }
    /// Raw ADC values in order.
    pub fn samples(&self) -> impl Iterator<Item = u16> + '_ {
        self.raw
            .chunks_exact(2)
            .map(|c| u16::from_le_bytes([c[0], c[1]]))
    }
}

/// Probe status.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default)]
pub struct Status {
    /// Ticks since probe start.
    pub uptime_ticks: u64,
    /// Frames sent since start.
    pub frames_sent: u32,
    /// Edges the probe could not record.
    pub edges_dropped: u32,
    /// Analog samples the probe could not record.
    pub samples_dropped: u32,
    /// Buffer overflow events.
    pub overflows: u16,
    /// Host frames rejected (CRC, COBS, length).
    pub rx_bad_frames: u16,
    /// Transmit buffer fill, %.
    pub buffer_fill_pct: u8,
    /// 0 idle, 1 streaming.
    pub state: u8,
}

/// Acknowledgement results.
pub mod results {
    /// Done.
    pub const OK: u8 = 0;
    /// Command type not known.
    pub const UNKNOWN_COMMAND: u8 = 1;
    /// No such channel.
    pub const BAD_CHANNEL: u8 = 2;
    /// No such parameter.
    pub const BAD_PARAM: u8 = 3;
    /// Value out of range.
    pub const BAD_VALUE: u8 = 4;
    /// The command frame was damaged (CRC, COBS, length); `acked_seq` is 0xFFFF.
    pub const BAD_FRAME: u8 = 5;
    /// Cannot do it now.
    pub const BUSY: u8 = 6;
    /// Frame version not supported.
    pub const BAD_VERSION: u8 = 7;
}

/// Acknowledgement of one host command.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Ack {
    /// Sequence number of the host frame (0xFFFF when unreadable).
    pub acked_seq: u16,
    /// Type of the command acknowledged (0 when unreadable).
    pub command: u8,
    /// See [`results`].
    pub result: u8,
    /// PING: the nonce; CONFIGURE: the value now in force; else 0.
    pub value: u32,
}

/// Probe log text.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Log<'a> {
    /// 0 info, 1 warning, 2 error.
    pub level: u8,
    /// UTF-8 text (≤ 200 bytes).
    pub text: &'a str,
}

/// CONFIGURE parameters.
pub mod params {
    /// Channel on (1) or off (0).
    pub const ENABLE: u8 = 1;
    /// Edge channel mode: 0 timestamps, 1 count windows, 2 both.
    pub const EDGE_MODE: u8 = 2;
    /// Count-window gate length in ticks.
    pub const GATE_TICKS: u8 = 3;
    /// Analog sample interval in ticks.
    pub const SAMPLE_INTERVAL_TICKS: u8 = 4;
    /// Level samples per count window.
    pub const DUTY_SAMPLES: u8 = 5;
    /// Analog calibration: scale numerator in µV (stored by the probe).
    pub const CAL_SCALE_NUM_UV: u8 = 6;
    /// Analog calibration: offset in µV, two's complement (stored by the probe).
    pub const CAL_OFFSET_UV: u8 = 7;
    /// Status message interval in ms (probe-wide, channel 0xFF).
    pub const STATUS_INTERVAL_MS: u8 = 8;
    /// Channel id meaning "the whole probe".
    pub const PROBE: u8 = 0xFF;
}

/// Host command setting one parameter.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Configure {
    /// Channel id, or [`params::PROBE`].
    pub channel: u8,
    /// See [`params`].
    pub param: u8,
    /// New value.
    pub value: u32,
}

/// Every message of the protocol.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Message<'a> {
    /// Probe self-description.
    Hello(Hello<'a>),
    /// Edge timestamps.
    Edges(Edges<'a>),
    /// Count window.
    Count(CountWindow),
    /// Analog samples.
    Analog(Analog<'a>),
    /// Line change events.
    Lines(Edges<'a>),
    /// Probe status.
    Status(Status),
    /// Acknowledgement.
    Ack(Ack),
    /// Probe log text.
    Log(Log<'a>),
    /// Host asks for HELLO.
    Describe,
    /// Host starts streaming.
    Start,
    /// Host stops streaming.
    Stop,
    /// Host sets a parameter.
    Configure(Configure),
    /// Host checks the link; echoed in the ACK's value.
    Ping(u32),
}

/// Why a body could not be decoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum DecodeError {
    /// Unknown message type.
    UnknownType(u8),
    /// Body shorter than its fixed part or than its counts say.
    Truncated,
    /// Bytes left over after the message.
    TrailingBytes,
    /// A field holds an impossible value (named).
    BadField(&'static str),
    /// A delta is not minimal LEB128, longer than 9 bytes, or zero.
    BadDelta,
    /// A text field is not UTF-8.
    BadText,
}

/// Why a body could not be encoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BodyError {
    /// Does not fit [`MAX_BODY`] (or the buffer given).
    TooLong,
    /// A field breaks the layout's limits (named).
    BadField(&'static str),
}

struct Writer<'b> {
    buf: &'b mut [u8],
    len: usize,
}

impl Writer<'_> {
    fn put(&mut self, bytes: &[u8]) -> Result<(), BodyError> {
        let end = self.len + bytes.len();
        if end > self.buf.len() || end > MAX_BODY {
            return Err(BodyError::TooLong);
        }
        self.buf[self.len..end].copy_from_slice(bytes);
        self.len = end;
        Ok(())
    }
    fn u8(&mut self, v: u8) -> Result<(), BodyError> {
        self.put(&[v])
    }
    fn u16(&mut self, v: u16) -> Result<(), BodyError> {
        self.put(&v.to_le_bytes())
    }
    fn u32(&mut self, v: u32) -> Result<(), BodyError> {
        self.put(&v.to_le_bytes())
    }
    fn u64(&mut self, v: u64) -> Result<(), BodyError> {
        self.put(&v.to_le_bytes())
    }
    fn text(&mut self, s: &str, max: usize, field: &'static str) -> Result<(), BodyError> {
        if s.len() > max {
            return Err(BodyError::BadField(field));
        }
        self.u8(s.len() as u8)?;
        self.put(s.as_bytes())
    }
}

struct Reader<'a> {
    buf: &'a [u8],
}

impl<'a> Reader<'a> {
    fn take(&mut self, n: usize) -> Result<&'a [u8], DecodeError> {
        if self.buf.len() < n {
            return Err(DecodeError::Truncated);
        }
        let (a, b) = self.buf.split_at(n);
        self.buf = b;
        Ok(a)
    }
    fn u8(&mut self) -> Result<u8, DecodeError> {
        Ok(self.take(1)?[0])
    }
    fn u16(&mut self) -> Result<u16, DecodeError> {
        let b = self.take(2)?;
        Ok(u16::from_le_bytes([b[0], b[1]]))
    }
    fn u32(&mut self) -> Result<u32, DecodeError> {
        let b = self.take(4)?;
        Ok(u32::from_le_bytes([b[0], b[1], b[2], b[3]]))
    }
    fn i32(&mut self) -> Result<i32, DecodeError> {
        Ok(self.u32()? as i32)
    }
    fn u64(&mut self) -> Result<u64, DecodeError> {
        let b = self.take(8)?;
        let mut a = [0u8; 8];
        a.copy_from_slice(b);
        Ok(u64::from_le_bytes(a))
    }
    fn text(&mut self, max: usize, field: &'static str) -> Result<&'a str, DecodeError> {
        let n = self.u8()? as usize;
        if n > max {
            return Err(DecodeError::BadField(field));
        }
        core::str::from_utf8(self.take(n)?).map_err(|_| DecodeError::BadText)
    }
    fn end(&self) -> Result<(), DecodeError> {
        if self.buf.is_empty() {
            Ok(())
        } else {
            Err(DecodeError::TrailingBytes)
        }
    }
}

/// Longest firmware id.
pub const MAX_FIRMWARE: usize = 32;
/// Longest channel label.
pub const MAX_LABEL: usize = 16;
/// Most channels in a HELLO.
pub const MAX_CHANNELS: usize = 16;
/// Longest log text.
pub const MAX_LOG: usize = 200;
/// Largest encoded delta.
pub const MAX_DELTA_BYTES: usize = 9;

fn read_channel<'a>(r: &mut Reader<'a>) -> Result<Channel<'a>, DecodeError> {
    let id = r.u8()?;
    let kind = match r.u8()? {
        1 => ChannelKind::Edge,
        2 => ChannelKind::Line,
        3 => ChannelKind::Analog,
        _ => return Err(DecodeError::BadField("channel kind")),
    };
    let info = r.u8()?;
    let label = r.text(MAX_LABEL, "channel label")?;
    let (scale_num_uv, scale_den, offset_uv) = if kind == ChannelKind::Analog {
        let n = r.i32()?;
        let d = r.u32()?;
        if d == 0 {
            return Err(DecodeError::BadField("analog scale denominator"));
        }
        (n, d, r.i32()?)
    } else {
        (0, 1, 0)
    };
    Ok(Channel {
        id,
        kind,
        info,
        label,
        scale_num_uv,
        scale_den,
        offset_uv,
    })
}

impl<'a> Channels<'a> {
    /// Number of channels.
    pub fn len(&self) -> usize {
        match self {
            Channels::Raw(_, n) => *n as usize,
            Channels::List(l) => l.len(),
        }
    }
    /// Whether there are none.
    pub fn is_empty(&self) -> bool {
        self.len() == 0
    }
    /// The channels in order.
    pub fn iter(&self) -> ChannelIter<'a> {
        match *self {
            Channels::Raw(bytes, n) => ChannelIter(ChanInner::Raw(Reader { buf: bytes }, n)),
            Channels::List(l) => ChannelIter(ChanInner::List(l.iter())),
        }
    }
}

/// Iterator over [`Channels`].
pub struct ChannelIter<'a>(ChanInner<'a>);

enum ChanInner<'a> {
    Raw(Reader<'a>, u8),
    List(core::slice::Iter<'a, Channel<'a>>),
}

impl<'a> Iterator for ChannelIter<'a> {
    type Item = Channel<'a>;
    fn next(&mut self) -> Option<Channel<'a>> {
        match &mut self.0 {
            ChanInner::Raw(r, n) => {
                if *n == 0 {
                    return None;
                }
                *n -= 1;
                read_channel(r).ok()
            }
            ChanInner::List(it) => it.next().copied(),
        }
    }
}

/// Checks `count − 1` deltas and returns the byte length they occupy.
fn validate_deltas(bytes: &[u8], count: u16) -> Result<(), DecodeError> {
    // the usual case first: count − 1 single-byte deltas, each 1…127 (a branch-free pass)
    if bytes.len() + 1 == usize::from(count)
        && bytes
            .iter()
            .fold(0u8, |bad, &b| bad | u8::from(b.wrapping_sub(1) >= 0x7F))
            == 0
    {
        return Ok(());
    }
    validate_deltas_each(bytes, count)
}

/// [`validate_deltas`] one delta at a time (any lengths).
fn validate_deltas_each(bytes: &[u8], count: u16) -> Result<(), DecodeError> {
    let mut rest = bytes;
    for _ in 1..count {
        let before = rest.len();
        let (d, r) = unsigned_varint::decode::u64(rest).map_err(|e| match e {
            unsigned_varint::decode::Error::Insufficient => DecodeError::Truncated,
            _ => DecodeError::BadDelta,
        })?;
        if d == 0 || before - r.len() > MAX_DELTA_BYTES {
            return Err(DecodeError::BadDelta);
        }
        rest = r;
    }
    if rest.is_empty() {
        Ok(())
    } else {
        Err(DecodeError::TrailingBytes)
    }
}

fn decode_edges(body: &[u8]) -> Result<Edges<'_>, DecodeError> {
    let mut r = Reader { buf: body };
    let channel = r.u8()?;
    let first = r.u8()?;
    if first > 1 {
        return Err(DecodeError::BadField("first level"));
    }
    let flags = r.u8()?;
    let count = r.u16()?;
    if count == 0 {
        return Err(DecodeError::BadField("edge count"));
    }
    let first_tick = r.u64()?;
    let deltas = r.buf;
    validate_deltas(deltas, count)?;
    Ok(Edges {
        channel,
        first_rising: first == 1,
        flags,
        count,
        first_tick,
        deltas,
    })
}

impl<'a> Message<'a> {
    /// Type code of this message.
    pub fn msg_type(&self) -> u8 {
        use types::*;
        match self {
            Message::Hello(_) => HELLO,
            Message::Edges(_) => EDGES,
            Message::Count(_) => COUNT,
            Message::Analog(_) => ANALOG,
            Message::Lines(_) => LINES,
            Message::Status(_) => STATUS,
            Message::Ack(_) => ACK,
            Message::Log(_) => LOG,
            Message::Describe => DESCRIBE,
            Message::Start => START,
            Message::Stop => STOP,
            Message::Configure(_) => CONFIGURE,
            Message::Ping(_) => PING,
        }
    }

    /// Decode the body of an intact frame.
    pub fn decode(frame: &RawFrame<'a>) -> Result<Message<'a>, DecodeError> {
        use types::*;
        let body = frame.body;
        let mut r = Reader { buf: body };
        let m = match frame.header.msg_type {
            HELLO => {
                let protocol_version = r.u8()?;
                let _flags = r.u8()?;
                let tick_num_hz = r.u64()?;
                let tick_den = r.u32()?;
                if tick_num_hz == 0 || tick_den == 0 {
                    return Err(DecodeError::BadField("tick rate"));
                }
                let timebase_ppm = r.u16()?;
                let max_edge_rate_khz = r.u32()?;
                let firmware = r.text(MAX_FIRMWARE, "firmware id")?;
                let n = r.u8()?;
                if n as usize > MAX_CHANNELS {
                    return Err(DecodeError::BadField("channel count"));
                }
                let start = r.buf;
                for _ in 0..n {
                    read_channel(&mut r)?;
                }
                let used = start.len() - r.buf.len();
                r.end()?;
                Message::Hello(Hello {
                    protocol_version,
                    tick_num_hz,
                    tick_den,
                    timebase_ppm,
                    max_edge_rate_khz,
                    firmware,
                    channels: Channels::Raw(&start[..used], n),
                })
            }
            EDGES => return Ok(Message::Edges(decode_edges(body)?)),
            LINES => return Ok(Message::Lines(decode_edges(body)?)),
            COUNT => {
                let c = CountWindow {
                    channel: r.u8()?,
                    method: r.u8()?,
                    start_tick: r.u64()?,
                    gate_ticks: r.u32()?,
                    edges: r.u32()?,
                    samples: r.u32()?,
                    samples_high: r.u32()?,
                };
                if c.method > methods::RECIPROCAL {
                    return Err(DecodeError::BadField("count method"));
                }
                if c.samples_high > c.samples {
                    return Err(DecodeError::BadField("samples_high above samples"));
                }
                r.end()?;
                Message::Count(c)
            }
            ANALOG => {
                let channel = r.u8()?;
                let flags = r.u8()?;
                let count = r.u16()? as usize;
                let first_tick = r.u64()?;
                let interval_ticks = r.u32()?;
                if interval_ticks == 0 {
                    return Err(DecodeError::BadField("sample interval"));
                }
                let raw = r.take(count * 2)?;
                r.end()?;
                Message::Analog(Analog {
                    channel,
                    flags,
                    first_tick,
                    interval_ticks,
                    raw,
                })
            }
            STATUS => {
                let s = Status {
                    uptime_ticks: r.u64()?,
                    frames_sent: r.u32()?,
                    edges_dropped: r.u32()?,
                    samples_dropped: r.u32()?,
                    overflows: r.u16()?,
                    rx_bad_frames: r.u16()?,
                    buffer_fill_pct: r.u8()?,
                    state: r.u8()?,
                };
                r.end()?;
                Message::Status(s)
            }
            ACK => {
                let a = Ack {
                    acked_seq: r.u16()?,
                    command: r.u8()?,
                    result: r.u8()?,
                    value: r.u32()?,
                };
                r.end()?;
                Message::Ack(a)
            }
            LOG => {
                let level = r.u8()?;
                let text = r.text(MAX_LOG, "log text")?;
                r.end()?;
                Message::Log(Log { level, text })
            }
            DESCRIBE | START | STOP => {
                r.end()?;
                match frame.header.msg_type {
                    DESCRIBE => Message::Describe,
                    START => Message::Start,
                    _ => Message::Stop,
                }
            }
            CONFIGURE => {
                let c = Configure {
                    channel: r.u8()?,
                    param: r.u8()?,
                    value: r.u32()?,
                };
                r.end()?;
                Message::Configure(c)
            }
            PING => {
                let n = r.u32()?;
                r.end()?;
                Message::Ping(n)
            }
            t => return Err(DecodeError::UnknownType(t)),
        };
        Ok(m)
    }

    /// Encode the body into `out`; returns its length.
    pub fn encode_body(&self, out: &mut [u8]) -> Result<usize, BodyError> {
        let mut w = Writer { buf: out, len: 0 };
        match self {
            Message::Hello(h) => {
                w.u8(h.protocol_version)?;
                w.u8(0)?;
                if h.tick_num_hz == 0 || h.tick_den == 0 {
                    return Err(BodyError::BadField("tick rate"));
                }
                w.u64(h.tick_num_hz)?;
                w.u32(h.tick_den)?;
                w.u16(h.timebase_ppm)?;
                w.u32(h.max_edge_rate_khz)?;
                w.text(h.firmware, MAX_FIRMWARE, "firmware id")?;
                match h.channels {
                    Channels::Raw(bytes, n) => {
                        w.u8(n)?;
                        w.put(bytes)?;
                    }
                    Channels::List(list) => {
                        if list.len() > MAX_CHANNELS {
                            return Err(BodyError::BadField("channel count"));
                        }
                        w.u8(list.len() as u8)?;
                        for c in list {
                            w.u8(c.id)?;
                            w.u8(c.kind as u8)?;
                            w.u8(c.info)?;
                            w.text(c.label, MAX_LABEL, "channel label")?;
                            if c.kind == ChannelKind::Analog {
                                if c.scale_den == 0 {
                                    return Err(BodyError::BadField("analog scale denominator"));
                                }
                                w.u32(c.scale_num_uv as u32)?;
                                w.u32(c.scale_den)?;
                                w.u32(c.offset_uv as u32)?;
                            }
                        }
                    }
                }
            }
            Message::Edges(e) | Message::Lines(e) => {
                w.u8(e.channel)?;
                w.u8(e.first_rising as u8)?;
                w.u8(e.flags)?;
                w.u16(e.count)?;
                w.u64(e.first_tick)?;
                w.put(e.deltas)?;
            }
            Message::Count(c) => {
                w.u8(c.channel)?;
                w.u8(c.method)?;
                w.u64(c.start_tick)?;
                w.u32(c.gate_ticks)?;
                w.u32(c.edges)?;
                w.u32(c.samples)?;
                w.u32(c.samples_high)?;
            }
            Message::Analog(a) => {
                if a.raw.len() % 2 != 0 || a.raw.len() / 2 > u16::MAX as usize {
                    return Err(BodyError::BadField("analog samples"));
                }
                w.u8(a.channel)?;
                w.u8(a.flags)?;
                w.u16((a.raw.len() / 2) as u16)?;
                w.u64(a.first_tick)?;
                w.u32(a.interval_ticks)?;
                w.put(a.raw)?;
            }
            Message::Status(s) => {
                w.u64(s.uptime_ticks)?;
                w.u32(s.frames_sent)?;
                w.u32(s.edges_dropped)?;
                w.u32(s.samples_dropped)?;
                w.u16(s.overflows)?;
                w.u16(s.rx_bad_frames)?;
                w.u8(s.buffer_fill_pct)?;
                w.u8(s.state)?;
            }
            Message::Ack(a) => {
                w.u16(a.acked_seq)?;
                w.u8(a.command)?;
                w.u8(a.result)?;
                w.u32(a.value)?;
            }
            Message::Log(l) => {
                w.u8(l.level)?;
                w.text(l.text, MAX_LOG, "log text")?;
            }
            Message::Describe | Message::Start | Message::Stop => {}
            Message::Configure(c) => {
                w.u8(c.channel)?;
                w.u8(c.param)?;
                w.u32(c.value)?;
            }
            Message::Ping(n) => w.u32(*n)?,
        }
        Ok(w.len)
    }
}

/// Fixed part of an EDGES/LINES body.
pub const EDGES_FIXED: usize = 13;

/// State of an EDGES or LINES body being built in a caller-owned buffer, timestamp by
/// timestamp; keeps no borrow, so a sender can hold several open batches between calls.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct EdgeBatch {
    len: usize,
    count: u16,
    last: u64,
}

impl EdgeBatch {
    /// Write the fixed part into `buf` (≥ 13 bytes) for a batch whose first edge is at `first_tick`.
    pub fn start(
        buf: &mut [u8],
        channel: u8,
        first_rising: bool,
        flags: u8,
        first_tick: u64,
    ) -> EdgeBatch {
        buf[0] = channel;
        buf[1] = first_rising as u8;
        buf[2] = flags;
        buf[5..13].copy_from_slice(&first_tick.to_le_bytes());
        EdgeBatch {
            len: EDGES_FIXED,
            count: 1,
            last: first_tick,
        }
    }

    /// Add the next timestamp; false when the batch is full or the tick does not increase
    /// (nothing written then).
    #[inline]
    pub fn push(&mut self, buf: &mut [u8], tick: u64) -> bool {
        let d = tick.wrapping_sub(self.last);
        let limit = buf.len().min(MAX_BODY);
        if self.count == u16::MAX || self.len + MAX_DELTA_BYTES > limit || d == 0 || d >= 1 << 63 {
            return false;
        }
        if d < 0x80 {
            buf[self.len] = d as u8; // one-byte LEB128: the common case
            self.len += 1;
        } else {
            let mut tmp = unsigned_varint::encode::u64_buffer();
            let enc = unsigned_varint::encode::u64(d, &mut tmp);
            buf[self.len..self.len + enc.len()].copy_from_slice(enc);
            self.len += enc.len();
        }
        self.count += 1;
        self.last = tick;
        true
    }

    /// Timestamps so far.
    pub fn count(&self) -> u16 {
        self.count
    }

    /// Tick of the last timestamp.
    pub fn last_tick(&self) -> u64 {
        self.last
    }

    /// Close the batch (writes the count); returns the body length.
    pub fn finish(self, buf: &mut [u8]) -> usize {
        buf[3..5].copy_from_slice(&self.count.to_le_bytes());
        self.len
    }
}

/// Builds an EDGES or LINES body in a borrowed buffer (an [`EdgeBatch`] with its buffer).
pub struct EdgeWriter<'b> {
    buf: &'b mut [u8],
    batch: EdgeBatch,
}

impl<'b> EdgeWriter<'b> {
    /// Start a batch whose first edge is at `first_tick`.
    pub fn new(
        buf: &'b mut [u8],
        channel: u8,
        first_rising: bool,
        flags: u8,
        first_tick: u64,
    ) -> Self {
        assert!(
            buf.len() >= EDGES_FIXED,
            "buffer holds at least the fixed part"
        );
        let batch = EdgeBatch::start(buf, channel, first_rising, flags, first_tick);
        EdgeWriter { buf, batch }
    }

    /// Add the next timestamp; false when the batch is full (nothing was written).
    #[inline]
    pub fn push(&mut self, tick: u64) -> bool {
        self.batch.push(self.buf, tick)
    }

    /// Timestamps so far.
    pub fn count(&self) -> u16 {
        self.batch.count()
    }

    /// Close the batch; returns the body length.
    pub fn finish(self) -> usize {
        self.batch.finish(self.buf)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::frame::{Header, VERSION};

    fn edges_body(count: u16, first_tick: u64, deltas: &[u8]) -> ([u8; MAX_BODY], usize) {
        let mut b = [0u8; MAX_BODY];
        b[1] = 1;
        b[3..5].copy_from_slice(&count.to_le_bytes());
        b[5..13].copy_from_slice(&first_tick.to_le_bytes());
        b[13..13 + deltas.len()].copy_from_slice(deltas);
        (b, 13 + deltas.len())
    }

    /// The one-pass check of single-byte deltas accepts and refuses exactly what the
    /// delta-by-delta check does, on bytes chosen to hit its edges (0, 0x7F, 0x80, 0xFF).
    #[test]
    fn fast_delta_check_agrees_with_the_delta_by_delta_check() {
        let mut x: u32 = 0x1234_5678;
        let pick = [0u8, 1, 2, 0x7E, 0x7F, 0x80, 0x81, 0xFF];
        for _ in 0..20_000 {
            x ^= x << 13;
            x ^= x >> 17;
            x ^= x << 5;
            let len = (x % 12) as usize;
            let mut bytes = [0u8; 12];
            for (i, b) in bytes[..len].iter_mut().enumerate() {
                *b = pick[((x >> (i * 3 % 29)) & 7) as usize];
            }
            for count in [len as u16, len as u16 + 1, len as u16 + 2] {
                assert_eq!(
                    validate_deltas(&bytes[..len], count).is_ok(),
                    validate_deltas_each(&bytes[..len], count).is_ok(),
                    "{:?} count {count}",
                    &bytes[..len]
                );
            }
        }
    }

    /// `ticks_into` gives what the iterator gives, with one-byte and longer deltas.
    #[test]
    fn ticks_into_equals_the_iterator() {
        let cases: [(&[u8], u16); 4] = [
            (&[62, 63, 61, 127, 1], 6),
            (&[0x80, 0x01, 5, 0xFF, 0x7F], 4),
            (&[], 1),
            (&[9], 2),
        ];
        for (deltas, count) in cases {
            let (b, n) = edges_body(count, u64::MAX - 1_000_000, deltas);
            let e = decode_edges(&b[..n]).unwrap();
            let mut want = [0u64; 8];
            let mut m = 0;
            for t in e.ticks() {
                want[m] = t;
                m += 1;
            }
            assert_eq!(m, usize::from(count));
            let mut got = [0u64; 8];
            let k = e.ticks_into(&mut got);
            assert_eq!(&got[..k], &want[..m], "{deltas:?}");
            // a short buffer takes the first ones
            let k = e.ticks_into(&mut got[..1]);
            assert_eq!(&got[..k], &want[..1]);
        }
    }

    fn round_trip(m: Message<'_>) {
        let mut body = [0u8; MAX_BODY];
        let n = m.encode_body(&mut body).unwrap();
        let f = RawFrame {
            header: Header {
                version: VERSION,
                msg_type: m.msg_type(),
                seq: 0,
            },
            body: &body[..n],
        };
        let back = Message::decode(&f).unwrap();
        let mut again = [0u8; MAX_BODY];
        let n2 = back.encode_body(&mut again).unwrap();
        assert_eq!(&body[..n], &again[..n2], "{m:?}");
    }

    #[test]
    fn every_message_round_trips() {
        let chans = [
            Channel::edge(0, 7, "CLK"),
            Channel {
                id: 8,
                kind: ChannelKind::Analog,
                info: 12,
                label: "VCC_FAR",
                scale_num_uv: 5_500_000,
                scale_den: 1024,
                offset_uv: -3,
            },
        ];
        round_trip(Message::Hello(Hello {
            protocol_version: 1,
            tick_num_hz: 125_000_000,
            tick_den: 1,
            timebase_ppm: 50,
            max_edge_rate_khz: 20_000,
            firmware: "test",
            channels: Channels::List(&chans),
        }));
        round_trip(Message::Count(CountWindow {
            channel: 0,
            method: 1,
            start_tick: 9,
            gate_ticks: 10,
            edges: 3,
            samples: 8,
            samples_high: 4,
        }));
        round_trip(Message::Status(Status {
            uptime_ticks: 1 << 40,
            frames_sent: 3,
            ..Default::default()
        }));
        round_trip(Message::Ack(Ack {
            acked_seq: 4,
            command: types::PING,
            result: 0,
            value: 77,
        }));
        round_trip(Message::Log(Log {
            level: 1,
            text: "héllo",
        }));
        round_trip(Message::Configure(Configure {
            channel: 0xFF,
            param: 8,
            value: 1000,
        }));
        round_trip(Message::Ping(0xDEAD_BEEF));
        round_trip(Message::Describe);
        round_trip(Message::Start);
        round_trip(Message::Stop);
        round_trip(Message::Analog(Analog {
            channel: 8,
            flags: 0,
            first_tick: 5,
            interval_ticks: 100,
            raw: &[1, 2, 3, 4],
        }));
    }

    #[test]
    fn edge_writer_and_ticks_agree() {
        let mut buf = [0u8; 256];
        let mut w = EdgeWriter::new(&mut buf, 2, true, 0, 1000);
        let ticks = [1000u64, 1001, 1130, 1_000_000, 1_000_000_000_000];
        for &t in &ticks[1..] {
            assert!(w.push(t));
        }
        assert!(!w.push(1_000_000_000_000), "equal timestamp refused");
        let n = w.finish();
        let e = decode_edges(&buf[..n]).unwrap();
        assert_eq!(e.count, 5);
        let got: [u64; 5] = core::array::from_fn({
            let mut it = e.ticks();
            move |_| it.next().unwrap()
        });
        assert_eq!(got, ticks);
    }

    #[test]
    fn malformed_bodies_are_rejected() {
        // count says 3 but only one delta follows
        let mut body = [0u8; 14];
        body[3] = 3;
        body[13] = 5;
        assert_eq!(decode_edges(&body), Err(DecodeError::Truncated));
        // a zero delta is impossible (edges strictly increase)
        let mut body = [0u8; 14];
        body[3] = 2;
        assert_eq!(decode_edges(&body), Err(DecodeError::BadDelta));
        // a non-minimal delta (0x81 0x00 for 1)
        let mut body = [0u8; 15];
        body[3] = 2;
        body[13] = 0x81;
        assert_eq!(decode_edges(&body), Err(DecodeError::BadDelta));
        // trailing bytes after the deltas
        let mut body = [0u8; 15];
        body[3] = 2;
        body[13] = 1;
        body[14] = 1;
        assert_eq!(decode_edges(&body), Err(DecodeError::TrailingBytes));
    }
}

//! HELLO, the probe's self-description: its tick, its firmware and its channels.

use super::codes::{ChannelKind, MAX_FIRMWARE, MAX_LABEL};
use super::error::{BodyError, DecodeError};
use super::validate;
use super::wire::{Reader, Writer};

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
    /// An edge input with these capability bits ([`caps`](super::caps)); no analog scale.
    pub const fn edge(id: u8, capabilities: u8, label: &'a str) -> Self {
        Self::digital(id, ChannelKind::Edge, capabilities, label)
    }

    /// A line input with this role ([`roles`](super::roles)); no analog scale.
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

    fn read(r: &mut Reader<'a>) -> Result<Channel<'a>, DecodeError> {
        let id = r.u8()?;
        let kind = ChannelKind::from_byte(r.u8()?).ok_or(DecodeError::BadField("channel kind"))?;
        let info = r.u8()?;
        let label = r.text(MAX_LABEL, "channel label")?;
        let (scale_num_uv, scale_den, offset_uv) = if kind == ChannelKind::Analog {
            let n = r.i32()?;
            let d = r.u32()?;
            validate::scale_den(d).map_err(DecodeError::BadField)?;
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

    fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u8(self.id)?;
        w.u8(self.kind as u8)?;
        w.u8(self.info)?;
        w.text(self.label, MAX_LABEL, "channel label")?;
        if self.kind == ChannelKind::Analog {
            validate::scale_den(self.scale_den).map_err(BodyError::BadField)?;
            w.u32(self.scale_num_uv as u32)?;
            w.u32(self.scale_den)?;
            w.u32(self.offset_uv as u32)?;
        }
        Ok(())
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
                Channel::read(r).ok()
            }
            ChanInner::List(it) => it.next().copied(),
        }
    }
}

/// Probe self-description.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Hello<'a> {
    /// Protocol version the probe implements.
    pub protocol_version: u8,
    /// How the probe observes its clock inputs ([`classes`](super::classes); 0: not stated).
    pub probe_class: u8,
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

impl<'a> Hello<'a> {
    /// The body's fields, its channel descriptors checked one by one and kept as bytes.
    pub(super) fn read(r: &mut Reader<'a>) -> Result<Hello<'a>, DecodeError> {
        let protocol_version = r.u8()?;
        let probe_class = r.u8()?;
        if probe_class > super::classes::EXTREMES {
            return Err(DecodeError::BadField("probe class"));
        }
        let tick_num_hz = r.u64()?;
        let tick_den = r.u32()?;
        validate::tick_rate(tick_num_hz, tick_den).map_err(DecodeError::BadField)?;
        let timebase_ppm = r.u16()?;
        let max_edge_rate_khz = r.u32()?;
        let firmware = r.text(MAX_FIRMWARE, "firmware id")?;
        let n = r.u8()?;
        validate::channel_count(usize::from(n)).map_err(DecodeError::BadField)?;
        let start = r.buf;
        for _ in 0..n {
            Channel::read(r)?;
        }
        let used = start.len() - r.buf.len();
        Ok(Hello {
            protocol_version,
            probe_class,
            tick_num_hz,
            tick_den,
            timebase_ppm,
            max_edge_rate_khz,
            firmware,
            channels: Channels::Raw(&start[..used], n),
        })
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u8(self.protocol_version)?;
        if self.probe_class > super::classes::EXTREMES {
            return Err(BodyError::BadField("probe class"));
        }
        w.u8(self.probe_class)?;
        validate::tick_rate(self.tick_num_hz, self.tick_den).map_err(BodyError::BadField)?;
        w.u64(self.tick_num_hz)?;
        w.u32(self.tick_den)?;
        w.u16(self.timebase_ppm)?;
        w.u32(self.max_edge_rate_khz)?;
        w.text(self.firmware, MAX_FIRMWARE, "firmware id")?;
        match self.channels {
            Channels::Raw(bytes, n) => {
                w.u8(n)?;
                w.put(bytes)?;
            }
            Channels::List(list) => {
                validate::channel_count(list.len()).map_err(BodyError::BadField)?;
                w.u8(list.len() as u8)?;
                for c in list {
                    c.write(w)?;
                }
            }
        }
        Ok(())
    }
}

//! The probe's reports besides data (STATUS, ACK, LOG) and the host's commands with a body
//! (CONFIGURE; PING's nonce is a bare u32).

use super::codes::MAX_LOG;
use super::error::{BodyError, DecodeError};
use super::wire::{Reader, Writer};

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

impl Status {
    pub(super) fn read(r: &mut Reader<'_>) -> Result<Status, DecodeError> {
        Ok(Status {
            uptime_ticks: r.u64()?,
            frames_sent: r.u32()?,
            edges_dropped: r.u32()?,
            samples_dropped: r.u32()?,
            overflows: r.u16()?,
            rx_bad_frames: r.u16()?,
            buffer_fill_pct: r.u8()?,
            state: r.u8()?,
        })
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u64(self.uptime_ticks)?;
        w.u32(self.frames_sent)?;
        w.u32(self.edges_dropped)?;
        w.u32(self.samples_dropped)?;
        w.u16(self.overflows)?;
        w.u16(self.rx_bad_frames)?;
        w.u8(self.buffer_fill_pct)?;
        w.u8(self.state)
    }
}

/// Acknowledgement of one host command.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Ack {
    /// Sequence number of the host frame (0xFFFF when unreadable).
    pub acked_seq: u16,
    /// Type of the command acknowledged (0 when unreadable).
    pub command: u8,
    /// See [`results`](super::results).
    pub result: u8,
    /// PING: the nonce; CONFIGURE: the value now in force; else 0.
    pub value: u32,
}

impl Ack {
    pub(super) fn read(r: &mut Reader<'_>) -> Result<Ack, DecodeError> {
        Ok(Ack {
            acked_seq: r.u16()?,
            command: r.u8()?,
            result: r.u8()?,
            value: r.u32()?,
        })
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u16(self.acked_seq)?;
        w.u8(self.command)?;
        w.u8(self.result)?;
        w.u32(self.value)
    }
}

/// Probe log text.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Log<'a> {
    /// 0 info, 1 warning, 2 error.
    pub level: u8,
    /// UTF-8 text (≤ 200 bytes).
    pub text: &'a str,
}

impl<'a> Log<'a> {
    pub(super) fn read(r: &mut Reader<'a>) -> Result<Log<'a>, DecodeError> {
        let level = r.u8()?;
        let text = r.text(MAX_LOG, "log text")?;
        Ok(Log { level, text })
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u8(self.level)?;
        w.text(self.text, MAX_LOG, "log text")
    }
}

/// Host command setting one parameter.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Configure {
    /// Channel id, or [`params::PROBE`](super::params::PROBE).
    pub channel: u8,
    /// See [`params`](super::params).
    pub param: u8,
    /// New value.
    pub value: u32,
}

impl Configure {
    pub(super) fn read(r: &mut Reader<'_>) -> Result<Configure, DecodeError> {
        Ok(Configure {
            channel: r.u8()?,
            param: r.u8()?,
            value: r.u32()?,
        })
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u8(self.channel)?;
        w.u8(self.param)?;
        w.u32(self.value)
    }
}

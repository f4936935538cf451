//! COUNT and ANALOG: a counting probe's windows (gated or reciprocal counts, level samples),
//! and batches of raw analog samples.

use super::codes::methods;
use super::error::{BodyError, DecodeError};
use super::validate;
use super::wire::{Reader, Writer};

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

impl CountWindow {
    pub(super) fn read(r: &mut Reader<'_>) -> Result<CountWindow, DecodeError> {
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
        // the window's end is a tick too
        validate::ticks_fit(c.start_tick, 2, u64::from(c.gate_ticks))?;
        Ok(c)
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u8(self.channel)?;
        w.u8(self.method)?;
        w.u64(self.start_tick)?;
        w.u32(self.gate_ticks)?;
        w.u32(self.edges)?;
        w.u32(self.samples)?;
        w.u32(self.samples_high)
    }
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

impl<'a> Analog<'a> {
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

    pub(super) fn read(r: &mut Reader<'a>) -> Result<Analog<'a>, DecodeError> {
        let channel = r.u8()?;
        let flags = r.u8()?;
        let count = r.u16()? as usize;
        let first_tick = r.u64()?;
        let interval_ticks = r.u32()?;
        if interval_ticks == 0 {
            return Err(DecodeError::BadField("sample interval"));
        }
        let raw = r.take(count * 2)?;
        validate::ticks_fit(first_tick, count as u64, u64::from(interval_ticks))?;
        Ok(Analog {
            channel,
            flags,
            first_tick,
            interval_ticks,
            raw,
        })
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        if !self.raw.len().is_multiple_of(2) || self.raw.len() / 2 > u16::MAX as usize {
            return Err(BodyError::BadField("analog samples"));
        }
        w.u8(self.channel)?;
        w.u8(self.flags)?;
        w.u16((self.raw.len() / 2) as u16)?;
        w.u64(self.first_tick)?;
        w.u32(self.interval_ticks)?;
        w.put(self.raw)
    }
}

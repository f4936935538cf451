//! EXTREMES and VIOLATIONS: what a probe that times every cycle but cannot send every
//! timestamp reports per window — the cycle count, the extremes of the high time, the low time
//! and the period, their sums, a coarse period histogram — and the cycles whose phase was
//! shorter than a threshold the host set, with the first few of them stamped.

use super::codes::{MAX_BINS, MAX_VIOLATION_STAMPS};
use super::error::{BodyError, DecodeError};
use super::validate;
use super::wire::{Reader, Writer};

/// One window's extremes of every cycle of a clock channel.
///
/// A cycle is a high phase (rising edge to falling edge) and the low phase after it (falling
/// edge to the next rising edge); it belongs to the window in which that closing rising edge
/// lies. Times are in ticks; a phase longer than `u32::MAX` ticks is counted as `u32::MAX`.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ExtremesWindow<'a> {
    /// Channel id.
    pub channel: u8,
    /// Bit 0 ([`FLAG_LOST_BEFORE`](super::FLAG_LOST_BEFORE)): windows were lost just before
    /// this one.
    pub flags: u8,
    /// Tick at which the window opened.
    pub start_tick: u64,
    /// Window length, ticks (≥ 1): the window is `start_tick … start_tick + window_ticks − 1`.
    pub window_ticks: u32,
    /// Cycles closed in the window.
    pub cycles: u32,
    /// Shortest high time.
    pub high_min_ticks: u32,
    /// Longest high time.
    pub high_max_ticks: u32,
    /// Shortest low time.
    pub low_min_ticks: u32,
    /// Longest low time.
    pub low_max_ticks: u32,
    /// Shortest period.
    pub period_min_ticks: u32,
    /// Longest period.
    pub period_max_ticks: u32,
    /// Sum of the high times.
    pub high_sum_ticks: u64,
    /// Sum of the low times.
    pub low_sum_ticks: u64,
    /// Lower edge of the histogram's first bin, ticks.
    pub bin_origin_ticks: u32,
    /// Width of every bin, ticks (≥ 1 when there are bins).
    pub bin_width_ticks: u32,
    /// Period histogram: `bins × 4` bytes, u32 LE counts (decoded bodies: validated).
    pub bins: &'a [u8],
}

impl<'a> ExtremesWindow<'a> {
    /// Number of histogram bins.
    pub fn bin_count(&self) -> usize {
        self.bins.len() / 4
    }

    /// The histogram's counts in order.
    pub fn bin_counts(&self) -> impl Iterator<Item = u32> + '_ {
        self.bins
            .chunks_exact(4)
            .map(|c| u32::from_le_bytes([c[0], c[1], c[2], c[3]]))
    }

    pub(super) fn read(r: &mut Reader<'a>) -> Result<ExtremesWindow<'a>, DecodeError> {
        let w = ExtremesWindow {
            channel: r.u8()?,
            flags: r.u8()?,
            start_tick: r.u64()?,
            window_ticks: r.u32()?,
            cycles: r.u32()?,
            high_min_ticks: r.u32()?,
            high_max_ticks: r.u32()?,
            low_min_ticks: r.u32()?,
            low_max_ticks: r.u32()?,
            period_min_ticks: r.u32()?,
            period_max_ticks: r.u32()?,
            high_sum_ticks: r.u64()?,
            low_sum_ticks: r.u64()?,
            bin_origin_ticks: r.u32()?,
            bin_width_ticks: r.u32()?,
            bins: {
                let n = usize::from(r.u8()?);
                if n > MAX_BINS {
                    return Err(DecodeError::BadField("histogram bins"));
                }
                r.take(n * 4)?
            },
        };
        w.check().map_err(|e| match e {
            Bad::Field(f) => DecodeError::BadField(f),
            Bad::Overflow => DecodeError::TickOverflow,
        })?;
        Ok(w)
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        if !self.bins.len().is_multiple_of(4) || self.bins.len() / 4 > MAX_BINS {
            return Err(BodyError::BadField("histogram bins"));
        }
        self.check().map_err(|e| match e {
            Bad::Field(f) => BodyError::BadField(f),
            Bad::Overflow => BodyError::BadField("window end past 2^64 - 1"),
        })?;
        w.u8(self.channel)?;
        w.u8(self.flags)?;
        w.u64(self.start_tick)?;
        w.u32(self.window_ticks)?;
        w.u32(self.cycles)?;
        w.u32(self.high_min_ticks)?;
        w.u32(self.high_max_ticks)?;
        w.u32(self.low_min_ticks)?;
        w.u32(self.low_max_ticks)?;
        w.u32(self.period_min_ticks)?;
        w.u32(self.period_max_ticks)?;
        w.u64(self.high_sum_ticks)?;
        w.u64(self.low_sum_ticks)?;
        w.u32(self.bin_origin_ticks)?;
        w.u32(self.bin_width_ticks)?;
        w.u8((self.bins.len() / 4) as u8)?;
        w.put(self.bins)
    }

    /// The rules of PROTOCOL.md §5.9 that both directions share.
    fn check(&self) -> Result<(), Bad> {
        if self.window_ticks == 0 {
            return Err(Bad::Field("window length"));
        }
        validate::ticks_fit(self.start_tick, 2, u64::from(self.window_ticks))
            .map_err(|_| Bad::Overflow)?;
        let n = u128::from(self.cycles);
        let extremes = [
            (self.high_min_ticks, self.high_max_ticks, "high time"),
            (self.low_min_ticks, self.low_max_ticks, "low time"),
            (self.period_min_ticks, self.period_max_ticks, "period"),
        ];
        if n == 0 {
            let all_zero = extremes.iter().all(|(a, b, _)| *a == 0 && *b == 0)
                && self.high_sum_ticks == 0
                && self.low_sum_ticks == 0;
            if !all_zero {
                return Err(Bad::Field("extremes of a window without cycles"));
            }
        } else {
            for (min, max, what) in extremes {
                if min == 0 || min > max {
                    return Err(Bad::Field(what));
                }
            }
            for (sum, min, max, what) in [
                (
                    self.high_sum_ticks,
                    self.high_min_ticks,
                    self.high_max_ticks,
                    "high-time sum",
                ),
                (
                    self.low_sum_ticks,
                    self.low_min_ticks,
                    self.low_max_ticks,
                    "low-time sum",
                ),
            ] {
                let s = u128::from(sum);
                if s < n * u128::from(min) || s > n * u128::from(max) {
                    return Err(Bad::Field(what));
                }
            }
        }
        if !self.bins.is_empty() {
            if self.bin_width_ticks == 0 {
                return Err(Bad::Field("histogram bin width"));
            }
            let total: u64 = self.bin_counts().map(u64::from).sum();
            if total != u64::from(self.cycles) {
                return Err(Bad::Field("histogram total"));
            }
        }
        Ok(())
    }
}

/// One cycle whose phase was shorter than its threshold.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct ShortPhase {
    /// Tick of the edge that opened the phase.
    pub tick: u64,
    /// Its length, ticks (below the phase's threshold).
    pub length_ticks: u32,
    /// Whether it was a high phase (else a low phase).
    pub high: bool,
}

/// Bytes of one [`ShortPhase`] on the wire.
pub(super) const SHORT_PHASE_BYTES: usize = 13;

/// One window's count of the cycles whose high or low time was shorter than the thresholds
/// the host set (CONFIGURE parameters 9 and 10), with the first few of them stamped.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Violations<'a> {
    /// Channel id.
    pub channel: u8,
    /// Bit 0: windows were lost just before this one.
    pub flags: u8,
    /// Tick at which the window opened (the same windows as EXTREMES).
    pub start_tick: u64,
    /// Window length, ticks (≥ 1).
    pub window_ticks: u32,
    /// High-time threshold in force, ticks (0: not counted).
    pub high_threshold_ticks: u32,
    /// Low-time threshold in force, ticks (0: not counted).
    pub low_threshold_ticks: u32,
    /// Cycles whose high time was shorter than its threshold.
    pub high_short: u32,
    /// Cycles whose low time was shorter than its threshold.
    pub low_short: u32,
    /// The first short phases of the window, `13 × n` bytes: tick u64, length u32, phase u8
    /// (1 high, 0 low) (decoded bodies: validated).
    pub stamps: &'a [u8],
}

impl<'a> Violations<'a> {
    /// The stamped short phases in order.
    pub fn short_phases(&self) -> impl Iterator<Item = ShortPhase> + '_ {
        self.stamps.chunks_exact(SHORT_PHASE_BYTES).map(|c| {
            let mut t = [0u8; 8];
            t.copy_from_slice(&c[..8]);
            ShortPhase {
                tick: u64::from_le_bytes(t),
                length_ticks: u32::from_le_bytes([c[8], c[9], c[10], c[11]]),
                high: c[12] == 1,
            }
        })
    }

    /// Write the stamps of `phases` into `out` (13 bytes each); returns the bytes used.
    pub fn stamp_bytes(phases: &[ShortPhase], out: &mut [u8]) -> usize {
        let mut n = 0;
        for (p, o) in phases.iter().zip(out.chunks_exact_mut(SHORT_PHASE_BYTES)) {
            o[..8].copy_from_slice(&p.tick.to_le_bytes());
            o[8..12].copy_from_slice(&p.length_ticks.to_le_bytes());
            o[12] = u8::from(p.high);
            n += SHORT_PHASE_BYTES;
        }
        n
    }

    pub(super) fn read(r: &mut Reader<'a>) -> Result<Violations<'a>, DecodeError> {
        let v = Violations {
            channel: r.u8()?,
            flags: r.u8()?,
            start_tick: r.u64()?,
            window_ticks: r.u32()?,
            high_threshold_ticks: r.u32()?,
            low_threshold_ticks: r.u32()?,
            high_short: r.u32()?,
            low_short: r.u32()?,
            stamps: {
                let n = usize::from(r.u8()?);
                if n > MAX_VIOLATION_STAMPS {
                    return Err(DecodeError::BadField("violation stamps"));
                }
                r.take(n * SHORT_PHASE_BYTES)?
            },
        };
        v.check().map_err(|e| match e {
            Bad::Field(f) => DecodeError::BadField(f),
            Bad::Overflow => DecodeError::TickOverflow,
        })?;
        Ok(v)
    }

    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        if !self.stamps.len().is_multiple_of(SHORT_PHASE_BYTES)
            || self.stamps.len() / SHORT_PHASE_BYTES > MAX_VIOLATION_STAMPS
        {
            return Err(BodyError::BadField("violation stamps"));
        }
        self.check().map_err(|e| match e {
            Bad::Field(f) => BodyError::BadField(f),
            Bad::Overflow => BodyError::BadField("window end past 2^64 - 1"),
        })?;
        w.u8(self.channel)?;
        w.u8(self.flags)?;
        w.u64(self.start_tick)?;
        w.u32(self.window_ticks)?;
        w.u32(self.high_threshold_ticks)?;
        w.u32(self.low_threshold_ticks)?;
        w.u32(self.high_short)?;
        w.u32(self.low_short)?;
        w.u8((self.stamps.len() / SHORT_PHASE_BYTES) as u8)?;
        w.put(self.stamps)
    }

    /// The rules of PROTOCOL.md §5.10 that both directions share.
    fn check(&self) -> Result<(), Bad> {
        if self.window_ticks == 0 {
            return Err(Bad::Field("window length"));
        }
        validate::ticks_fit(self.start_tick, 2, u64::from(self.window_ticks))
            .map_err(|_| Bad::Overflow)?;
        if self.high_threshold_ticks == 0 && self.high_short > 0 {
            return Err(Bad::Field("high-time count without a threshold"));
        }
        if self.low_threshold_ticks == 0 && self.low_short > 0 {
            return Err(Bad::Field("low-time count without a threshold"));
        }
        let n = self.stamps.len() / SHORT_PHASE_BYTES;
        let (mut highs, mut lows) = (0u32, 0u32);
        for c in self.stamps.chunks_exact(SHORT_PHASE_BYTES) {
            let phase = c[12];
            let len = u32::from_le_bytes([c[8], c[9], c[10], c[11]]);
            let (threshold, count) = match phase {
                1 => (self.high_threshold_ticks, &mut highs),
                0 => (self.low_threshold_ticks, &mut lows),
                _ => return Err(Bad::Field("violation phase")),
            };
            if len == 0 || len >= threshold {
                return Err(Bad::Field("violation length"));
            }
            *count += 1;
            let mut t = [0u8; 8];
            t.copy_from_slice(&c[..8]);
            validate::ticks_fit(u64::from_le_bytes(t), 2, u64::from(len))
                .map_err(|_| Bad::Overflow)?;
        }
        if highs > self.high_short || lows > self.low_short || n > MAX_VIOLATION_STAMPS {
            return Err(Bad::Field("more stamps than short phases"));
        }
        Ok(())
    }
}

/// A broken rule: a named field, or a tick past 2^64 − 1.
enum Bad {
    Field(&'static str),
    Overflow,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::frame::MAX_BODY;

    fn window() -> ExtremesWindow<'static> {
        ExtremesWindow {
            channel: 0,
            flags: 0,
            start_tick: 1000,
            window_ticks: 500,
            cycles: 4,
            high_min_ticks: 60,
            high_max_ticks: 63,
            low_min_ticks: 61,
            low_max_ticks: 65,
            period_min_ticks: 122,
            period_max_ticks: 127,
            high_sum_ticks: 246,
            low_sum_ticks: 252,
            bin_origin_ticks: 120,
            bin_width_ticks: 4,
            bins: &[2, 0, 0, 0, 2, 0, 0, 0],
        }
    }

    fn decodes(w: &ExtremesWindow<'_>) -> Result<(), DecodeError> {
        // written without the checks, then read with them
        let mut buf = [0u8; MAX_BODY];
        let mut wr = Writer::new(&mut buf);
        for v in [w.channel, w.flags] {
            wr.u8(v).unwrap();
        }
        wr.u64(w.start_tick).unwrap();
        for v in [
            w.window_ticks,
            w.cycles,
            w.high_min_ticks,
            w.high_max_ticks,
            w.low_min_ticks,
            w.low_max_ticks,
            w.period_min_ticks,
            w.period_max_ticks,
        ] {
            wr.u32(v).unwrap();
        }
        wr.u64(w.high_sum_ticks).unwrap();
        wr.u64(w.low_sum_ticks).unwrap();
        wr.u32(w.bin_origin_ticks).unwrap();
        wr.u32(w.bin_width_ticks).unwrap();
        wr.u8((w.bins.len() / 4) as u8).unwrap();
        wr.put(w.bins).unwrap();
        let n = wr.len;
        ExtremesWindow::read(&mut Reader { buf: &buf[..n] }).map(|_| ())
    }

    /// Every rule of PROTOCOL.md §5.9 refuses what breaks it, in both directions.
    #[test]
    fn extremes_rules_refuse_what_breaks_them() {
        assert_eq!(decodes(&window()), Ok(()));
        type Breaks = fn(&mut ExtremesWindow<'static>);
        let cases: [(Breaks, &str); 8] = [
            (|w| w.window_ticks = 0, "window length"),
            (|w| w.high_min_ticks = 64, "high time"),
            (|w| w.low_min_ticks = 0, "low time"),
            (|w| w.period_max_ticks = 100, "period"),
            (|w| w.high_sum_ticks = 239, "high-time sum"),
            (|w| w.low_sum_ticks = 261, "low-time sum"),
            (|w| w.bin_width_ticks = 0, "histogram bin width"),
            (|w| w.cycles = 0, "extremes of a window without cycles"),
        ];
        for (breaks, field) in cases {
            let mut w = window();
            breaks(&mut w);
            assert_eq!(decodes(&w), Err(DecodeError::BadField(field)), "{field}");
            let mut out = [0u8; MAX_BODY];
            assert_eq!(
                w.write(&mut Writer::new(&mut out)),
                Err(BodyError::BadField(field)),
                "{field}"
            );
        }
        let mut w = window();
        w.start_tick = u64::MAX - 499;
        assert_eq!(decodes(&w), Err(DecodeError::TickOverflow));
        w.start_tick = u64::MAX - 500;
        assert_eq!(decodes(&w), Ok(()), "the last tick may be 2^64 - 1");
    }

    /// The rules of §5.10: counts need a threshold, stamps are short phases, no more stamps
    /// than counted phases, a phase byte is 0 or 1.
    #[test]
    fn violation_rules_refuse_what_breaks_them() {
        let stamp = |high: bool, len: u32| {
            let mut b = [0u8; SHORT_PHASE_BYTES];
            Violations::stamp_bytes(
                &[ShortPhase {
                    tick: 5,
                    length_ticks: len,
                    high,
                }],
                &mut b,
            );
            b
        };
        let ok = stamp(true, 9);
        fn v(stamps: &[u8], high_thr: u32, high_short: u32) -> Violations<'_> {
            Violations {
                channel: 0,
                flags: 0,
                start_tick: 0,
                window_ticks: 100,
                high_threshold_ticks: high_thr,
                low_threshold_ticks: 0,
                high_short,
                low_short: 0,
                stamps,
            }
        }
        let check = |v: &Violations<'_>| {
            let mut out = [0u8; MAX_BODY];
            let mut w = Writer::new(&mut out);
            v.write(&mut w).map(|_| w.len)
        };
        let good: &[u8] = &ok;
        assert!(check(&v(good, 10, 1)).is_ok());
        assert_eq!(
            check(&v(&[], 0, 1)),
            Err(BodyError::BadField("high-time count without a threshold"))
        );
        assert_eq!(
            check(&v(good, 9, 1)),
            Err(BodyError::BadField("violation length"))
        );
        assert_eq!(
            check(&v(good, 10, 0)),
            Err(BodyError::BadField("more stamps than short phases"))
        );
        let low_stamp = stamp(false, 3);
        let low: &[u8] = &low_stamp;
        assert_eq!(
            check(&v(low, 10, 1)),
            Err(BodyError::BadField("violation length")),
            "a low stamp with the low threshold off"
        );
        let mut bad = ok;
        bad[12] = 2;
        let bad: &[u8] = &bad;
        assert_eq!(
            check(&v(bad, 10, 1)),
            Err(BodyError::BadField("violation phase"))
        );
        // what encodes decodes to the same
        let mut out = [0u8; MAX_BODY];
        let n = check(&v(good, 10, 1)).unwrap();
        let mut w = Writer::new(&mut out);
        v(good, 10, 1).write(&mut w).unwrap();
        let back = Violations::read(&mut Reader { buf: &out[..n] }).unwrap();
        assert_eq!(back, v(good, 10, 1));
    }
}

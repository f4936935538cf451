//! EDGES and LINES: a channel's timestamps as a 64-bit first tick and LEB128 deltas; decoded
//! without copying, and built timestamp by timestamp in a caller's buffer.

use super::codes::MAX_DELTA_BYTES;
use super::error::{BodyError, DecodeError};
use super::validate;
use super::wire::{Reader, Writer};
use crate::frame::MAX_BODY;

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

/// Decode an EDGES or LINES body.
pub(super) fn read_edges(body: &[u8]) -> Result<Edges<'_>, DecodeError> {
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
    validate::deltas(deltas, count, first_tick)?;
    Ok(Edges {
        channel,
        first_rising: first == 1,
        flags,
        count,
        first_tick,
        deltas,
    })
}

impl Edges<'_> {
    pub(super) fn write(&self, w: &mut Writer<'_>) -> Result<(), BodyError> {
        w.u8(self.channel)?;
        w.u8(self.first_rising as u8)?;
        w.u8(self.flags)?;
        w.u16(self.count)?;
        w.u64(self.first_tick)?;
        w.put(self.deltas)
    }
}

/// Fixed part of an EDGES/LINES body.
const EDGES_FIXED: usize = 13;

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

    /// Close the batch; returns the body length.
    pub fn finish(self) -> usize {
        self.batch.finish(self.buf)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn edges_body(count: u16, first_tick: u64, deltas: &[u8]) -> ([u8; MAX_BODY], usize) {
        let mut b = [0u8; MAX_BODY];
        b[1] = 1;
        b[3..5].copy_from_slice(&count.to_le_bytes());
        b[5..13].copy_from_slice(&first_tick.to_le_bytes());
        b[13..13 + deltas.len()].copy_from_slice(deltas);
        (b, 13 + deltas.len())
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
            let e = read_edges(&b[..n]).unwrap();
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
        let e = read_edges(&buf[..n]).unwrap();
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
        assert_eq!(read_edges(&body), Err(DecodeError::Truncated));
        // a zero delta is impossible (edges strictly increase)
        let mut body = [0u8; 14];
        body[3] = 2;
        assert_eq!(read_edges(&body), Err(DecodeError::BadDelta));
        // a non-minimal delta (0x81 0x00 for 1)
        let mut body = [0u8; 15];
        body[3] = 2;
        body[13] = 0x81;
        assert_eq!(read_edges(&body), Err(DecodeError::BadDelta));
        // trailing bytes after the deltas
        let mut body = [0u8; 15];
        body[3] = 2;
        body[13] = 1;
        body[14] = 1;
        assert_eq!(read_edges(&body), Err(DecodeError::TrailingBytes));
    }
}

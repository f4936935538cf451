//! Frames: header, CRC-32, COBS encoding with a 0x00 delimiter, and the streaming decoder.
//!
//! Decoded frame = version (u8) · type (u8) · sequence (u16 LE) · body · CRC-32/ISO-HDLC (u32 LE)
//! over everything before it. On the wire: COBS(decoded frame) followed by one 0x00.

use crc::{CRC_32_ISO_HDLC, Crc, Table};

/// Protocol (and frame format) version this crate speaks.
pub const VERSION: u8 = 1;
/// Header length: version, type, sequence.
const HEADER_LEN: usize = 4;
/// CRC length.
const CRC_LEN: usize = 4;
/// Largest decoded frame (header + body + CRC).
const MAX_FRAME: usize = 1024;
/// Largest body.
pub const MAX_BODY: usize = MAX_FRAME - HEADER_LEN - CRC_LEN;
/// Largest frame on the wire: COBS overhead plus the delimiter.
pub const MAX_WIRE: usize = cobs::max_encoding_length(MAX_FRAME) + 1;

static CRC32: Crc<u32, Table<16>> = Crc::<u32, Table<16>>::new(&CRC_32_ISO_HDLC);

/// CRC-32/ISO-HDLC (check value 0xCBF43926 over "123456789").
pub fn crc32(bytes: &[u8]) -> u32 {
    CRC32.checksum(bytes)
}

/// Frame header.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct Header {
    /// Protocol version of the sender.
    pub version: u8,
    /// Message type.
    pub msg_type: u8,
    /// Sender's sequence number (per direction, wraps at 2^16).
    pub seq: u16,
}

/// A frame that passed COBS, length and CRC checks.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RawFrame<'a> {
    /// Header.
    pub header: Header,
    /// Body (without CRC).
    pub body: &'a [u8],
    /// Frames missing just before this one by the sequence numbers (0 from a single-frame
    /// decode): the receiver's data has a hole here.
    pub lost_before: u16,
}

/// Why bytes could not be turned into a frame.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum FrameError {
    /// COBS structure invalid.
    Cobs,
    /// Shorter than header + CRC.
    Runt,
    /// Longer than the maximum frame.
    Oversized,
    /// CRC mismatch.
    Crc,
    /// Version byte is not one this decoder speaks.
    Version(u8),
}

/// Why a frame could not be encoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum EncodeError {
    /// Body longer than [`MAX_BODY`].
    BodyTooLong,
    /// Output buffer too small (needs [`MAX_WIRE`] at most).
    OutputTooSmall,
}

/// Encode a frame onto the wire (COBS + trailing 0x00) into `out`; returns the bytes written.
pub fn encode_frame(
    msg_type: u8,
    seq: u16,
    body: &[u8],
    out: &mut [u8],
) -> Result<usize, EncodeError> {
    if body.len() > MAX_BODY {
        return Err(EncodeError::BodyTooLong);
    }
    let mut raw = [0u8; MAX_FRAME];
    let n = HEADER_LEN + body.len();
    raw[0] = VERSION;
    raw[1] = msg_type;
    raw[2..4].copy_from_slice(&seq.to_le_bytes());
    raw[HEADER_LEN..n].copy_from_slice(body);
    let crc = crc32(&raw[..n]);
    raw[n..n + CRC_LEN].copy_from_slice(&crc.to_le_bytes());
    let total = n + CRC_LEN;
    let need = cobs::max_encoding_length(total) + 1;
    if out.len() < need {
        return Err(EncodeError::OutputTooSmall);
    }
    let len = cobs::try_encode(&raw[..total], out).map_err(|_| EncodeError::OutputTooSmall)?;
    out[len] = 0;
    Ok(len + 1)
}

/// Check a decoded frame (header + body + CRC) and split it.
fn parse_decoded(decoded: &[u8]) -> Result<RawFrame<'_>, FrameError> {
    if decoded.len() < HEADER_LEN + CRC_LEN {
        return Err(FrameError::Runt);
    }
    if decoded.len() > MAX_FRAME {
        return Err(FrameError::Oversized);
    }
    let (data, crc) = decoded.split_at(decoded.len() - CRC_LEN);
    let want = u32::from_le_bytes([crc[0], crc[1], crc[2], crc[3]]);
    if crc32(data) != want {
        return Err(FrameError::Crc);
    }
    if data[0] != VERSION {
        return Err(FrameError::Version(data[0]));
    }
    Ok(RawFrame {
        header: Header {
            version: data[0],
            msg_type: data[1],
            seq: u16::from_le_bytes([data[2], data[3]]),
        },
        body: &data[HEADER_LEN..],
        lost_before: 0,
    })
}

/// Decode one wire frame (with or without its trailing 0x00) into `scratch`.
pub fn decode_frame<'s>(
    wire: &[u8],
    scratch: &'s mut [u8; MAX_WIRE],
) -> Result<RawFrame<'s>, FrameError> {
    let wire = wire.strip_suffix(&[0]).unwrap_or(wire);
    if wire.len() >= MAX_WIRE {
        return Err(FrameError::Oversized);
    }
    scratch[..wire.len()].copy_from_slice(wire);
    let n = cobs::decode_in_place(&mut scratch[..wire.len()]).map_err(|_| FrameError::Cobs)?;
    parse_decoded(&scratch[..n])
}

/// Counters of what the stream decoder saw.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq)]
pub struct Counters {
    /// Bytes pushed.
    pub bytes: u64,
    /// Frames accepted.
    pub frames: u64,
    /// Frames rejected for a CRC mismatch.
    pub crc_errors: u64,
    /// Frames rejected for invalid COBS structure.
    pub cobs_errors: u64,
    /// Frames rejected as shorter than header + CRC.
    pub runts: u64,
    /// Byte runs longer than the largest frame (discarded up to the next delimiter).
    pub oversized: u64,
    /// Frames with an unknown version byte.
    pub bad_version: u64,
    /// Times the sequence number jumped forward.
    pub seq_gaps: u64,
    /// Frames missing according to the sequence numbers (not received in order; a frame that
    /// arrives late is counted here and in `out_of_order`).
    pub lost_frames: u64,
    /// Frames dropped as copies of a recent frame (same sequence number and CRC as one of the
    /// last [`RECENT_FRAMES`] accepted): never delivered twice.
    pub duplicates: u64,
    /// Frames dropped because their sequence number lies behind the expectation and they are no
    /// copy of a recent frame (late or stale): the expectation does not move.
    pub out_of_order: u64,
    /// Times the sequence restarted without a HELLO (two successive frames far behind the
    /// expectation, the second following the first): tracking resumes from them.
    pub seq_restarts: u64,
    /// Version byte of the last frame rejected for its version (0: none yet).
    pub last_bad_version: u8,
}

impl Counters {
    /// Frames rejected for any reason.
    pub fn rejected(&self) -> u64 {
        self.crc_errors + self.cobs_errors + self.runts + self.oversized + self.bad_version
    }
}

/// Accepted frames remembered (sequence number and CRC) to tell a copy from a late frame.
pub const RECENT_FRAMES: usize = 32;

/// Streaming decoder: takes byte chunks of any size, yields intact frames, counts the rest,
/// resynchronises at the next 0x00. Memory is one wire frame, whatever arrives. Frames are
/// delivered in sequence order only: copies and late frames are counted and dropped.
pub struct StreamDecoder {
    buf: [u8; MAX_WIRE],
    len: usize,
    overflow: bool,
    next_seq: Option<u16>,
    /// (sequence number, CRC) of the last accepted frames, a ring; `recent_len` valid entries.
    recent: [(u16, u32); RECENT_FRAMES],
    recent_at: usize,
    recent_len: usize,
    /// Sequence number of the last frame dropped as far behind (a restart candidate).
    far_behind: Option<u16>,
    /// Totals so far.
    pub counters: Counters,
}

impl Default for StreamDecoder {
    fn default() -> Self {
        Self::new()
    }
}

/// Type of the self-description message, which restarts sequence tracking (a probe reset).
const HELLO_TYPE: u8 = 0x01;

impl StreamDecoder {
    /// A decoder waiting for the first delimiter-terminated frame.
    pub const fn new() -> Self {
        StreamDecoder {
            buf: [0; MAX_WIRE],
            len: 0,
            overflow: false,
            next_seq: None,
            recent: [(0, 0); RECENT_FRAMES],
            recent_at: 0,
            recent_len: 0,
            far_behind: None,
            counters: Counters {
                bytes: 0,
                frames: 0,
                crc_errors: 0,
                cobs_errors: 0,
                runts: 0,
                oversized: 0,
                bad_version: 0,
                seq_gaps: 0,
                lost_frames: 0,
                duplicates: 0,
                out_of_order: 0,
                seq_restarts: 0,
                last_bad_version: 0,
            },
        }
    }

    /// Forget sequence history (e.g. after a reconnect).
    pub fn reset_sequence(&mut self) {
        self.next_seq = None;
        self.recent_len = 0;
        self.far_behind = None;
    }

    /// Whether (seq, crc) is one of the last accepted frames.
    fn seen(&self, seq: u16, crc: u32) -> bool {
        self.recent[..self.recent_len].contains(&(seq, crc))
    }

    /// (seq, crc) of the last accepted frame.
    fn last(&self) -> Option<(u16, u32)> {
        (self.recent_len > 0)
            .then(|| self.recent[(self.recent_at + RECENT_FRAMES - 1) % RECENT_FRAMES])
    }

    fn remember(&mut self, seq: u16, crc: u32) {
        self.recent[self.recent_at] = (seq, crc);
        self.recent_at = (self.recent_at + 1) % RECENT_FRAMES;
        self.recent_len = (self.recent_len + 1).min(RECENT_FRAMES);
    }

    /// Sequence bookkeeping of an intact frame: None to drop it, else the frames missing just
    /// before it.
    fn admit(&mut self, msg_type: u8, seq: u16, crc: u32) -> Option<u16> {
        // a HELLO may come again, byte for byte, in answer to the next DESCRIBE: only a copy
        // right behind its original is a duplicate
        let copy = if msg_type == HELLO_TYPE {
            self.last() == Some((seq, crc))
        } else {
            self.seen(seq, crc)
        };
        if copy {
            self.counters.duplicates += 1;
            return None;
        }
        let far = core::mem::take(&mut self.far_behind);
        let mut lost = 0;
        if let Some(expect) = self.next_seq
            && seq != expect
        {
            let ahead = seq.wrapping_sub(expect);
            if msg_type == HELLO_TYPE {
                // a probe that kept running keeps its numbering across the HELLO it sends in
                // answer to DESCRIBE: a jump ahead is what the link lost meanwhile; 0 (or a
                // number behind) is a reset, and tracking starts again
                if seq != 0 && ahead < 0x8000 {
                    self.counters.seq_gaps += 1;
                    self.counters.lost_frames += u64::from(ahead);
                    lost = ahead;
                }
            } else if ahead < 0x8000 {
                self.counters.seq_gaps += 1;
                self.counters.lost_frames += u64::from(ahead);
                lost = ahead;
            } else if far == Some(seq.wrapping_sub(1)) {
                // two successive frames far behind: the sender restarted its numbers
                self.counters.seq_restarts += 1;
                self.recent_len = 0;
            } else {
                self.counters.out_of_order += 1;
                if expect.wrapping_sub(seq) as usize > RECENT_FRAMES {
                    self.far_behind = Some(seq);
                }
                return None;
            }
        }
        if msg_type == HELLO_TYPE {
            self.recent_len = 0;
        }
        self.counters.frames += 1;
        self.next_seq = Some(seq.wrapping_add(1));
        self.remember(seq, crc);
        Some(lost)
    }

    /// Feed bytes; `on_frame` is called for each intact frame, in order.
    pub fn push(&mut self, mut chunk: &[u8], mut on_frame: impl FnMut(RawFrame<'_>)) {
        self.counters.bytes += chunk.len() as u64;
        while !chunk.is_empty() {
            match chunk.iter().position(|&b| b == 0) {
                Some(i) => {
                    self.append(&chunk[..i]);
                    chunk = &chunk[i + 1..];
                    if let Some(f) = self.finish() {
                        on_frame(f);
                    }
                }
                None => {
                    self.append(chunk);
                    break;
                }
            }
        }
    }

    fn append(&mut self, part: &[u8]) {
        if self.overflow {
            return;
        }
        if self.len + part.len() >= MAX_WIRE {
            self.overflow = true;
            return;
        }
        self.buf[self.len..self.len + part.len()].copy_from_slice(part);
        self.len += part.len();
    }

    fn finish(&mut self) -> Option<RawFrame<'_>> {
        let len = core::mem::replace(&mut self.len, 0);
        if core::mem::replace(&mut self.overflow, false) {
            self.counters.oversized += 1;
            return None;
        }
        if len == 0 {
            return None; // back-to-back delimiters: idle filler, not an error
        }
        let n = match cobs::decode_in_place(&mut self.buf[..len]) {
            Ok(n) => n,
            Err(_) => {
                self.counters.cobs_errors += 1;
                return None;
            }
        };
        match parse_decoded(&self.buf[..n]) {
            Ok(f) => {
                let crc = u32::from_le_bytes([
                    self.buf[n - 4],
                    self.buf[n - 3],
                    self.buf[n - 2],
                    self.buf[n - 1],
                ]);
                let (msg_type, seq) = (f.header.msg_type, f.header.seq);
                let lost_before = self.admit(msg_type, seq, crc)?;
                let body_end = n - CRC_LEN;
                Some(RawFrame {
                    header: Header {
                        version: VERSION,
                        msg_type,
                        seq,
                    },
                    body: &self.buf[HEADER_LEN..body_end],
                    lost_before,
                })
            }
            Err(e) => {
                let c = &mut self.counters;
                match e {
                    FrameError::Crc => c.crc_errors += 1,
                    FrameError::Runt => c.runts += 1,
                    FrameError::Oversized => c.oversized += 1,
                    FrameError::Version(v) => {
                        c.bad_version += 1;
                        c.last_bad_version = v;
                    }
                    FrameError::Cobs => c.cobs_errors += 1,
                }
                None
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Catalogue of parametrised CRC algorithms: CRC-32/ISO-HDLC check value over "123456789".
    #[test]
    fn crc_check_value() {
        assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    }

    #[test]
    fn frame_round_trip() {
        let mut out = [0u8; MAX_WIRE];
        let n = encode_frame(0x45, 7, &[1, 0, 2, 0], &mut out).unwrap();
        assert_eq!(out[n - 1], 0);
        assert!(!out[..n - 1].contains(&0));
        let mut scratch = [0u8; MAX_WIRE];
        let f = decode_frame(&out[..n], &mut scratch).unwrap();
        assert_eq!(
            f.header,
            Header {
                version: VERSION,
                msg_type: 0x45,
                seq: 7
            }
        );
        assert_eq!(f.body, &[1, 0, 2, 0]);
    }

    #[test]
    fn largest_body_fits_the_wire_bound() {
        let body = [0u8; MAX_BODY];
        let mut out = [0u8; MAX_WIRE];
        let n = encode_frame(2, 0, &body, &mut out).unwrap();
        assert!(n <= MAX_WIRE);
        assert_eq!(
            encode_frame(2, 0, &[0u8; MAX_BODY + 1], &mut out),
            Err(EncodeError::BodyTooLong)
        );
    }
}

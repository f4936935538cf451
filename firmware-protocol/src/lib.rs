//! Wire protocol between the slackmeter host and its probes (specified in PROTOCOL.md).
//!
//! `no_std` and allocation-free, so probe firmware written in Rust can share it with the host:
//! message encoding and zero-copy decoding, COBS framing with CRC-32, and a streaming decoder
//! that survives any byte stream.
#![no_std]
#![deny(missing_docs)]

pub mod frame;
pub mod message;

pub use frame::{
    Counters, EncodeError, FrameError, Header, MAX_BODY, MAX_WIRE, RawFrame, StreamDecoder,
    VERSION, crc32, decode_frame, encode_frame,
};
pub use message::{
    Ack, Analog, BodyError, Channel, ChannelKind, Channels, Configure, CountWindow, DecodeError,
    EdgeBatch, EdgeWriter, Edges, ExtremesWindow, FLAG_BURST_START, FLAG_LOST_BEFORE, Hello, Log,
    Message, ShortPhase, Status, Violations, caps, classes, methods, params, results, roles, types,
};

/// Encode a whole message as one wire frame into `out` (needs at most [`MAX_WIRE`] bytes).
pub fn encode_message(msg: &Message<'_>, seq: u16, out: &mut [u8]) -> Result<usize, EncodeError> {
    let mut body = [0u8; MAX_BODY];
    let n = msg
        .encode_body(&mut body)
        .map_err(|_| EncodeError::BodyTooLong)?;
    encode_frame(msg.msg_type(), seq, &body[..n], out)
}

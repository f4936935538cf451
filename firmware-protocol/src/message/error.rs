//! Why a body could not be decoded or encoded.

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
    /// A tick of the batch or window would lie past 2^64 − 1 (the first tick plus the deltas,
    /// the sample intervals or the gate wraps): the message is refused as a whole.
    TickOverflow,
}

/// Why a body could not be encoded.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum BodyError {
    /// Does not fit [`MAX_BODY`](crate::MAX_BODY) (or the buffer given).
    TooLong,
    /// A field breaks the layout's limits (named).
    BadField(&'static str),
}

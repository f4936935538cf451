//! Checks of field values that decoding and encoding share, and of the timestamp deltas (the
//! one variable-length field that decoding must walk).

use super::codes::{MAX_CHANNELS, MAX_DELTA_BYTES};
use super::error::DecodeError;

/// A tick rate is a positive numerator over a positive denominator.
pub(super) fn tick_rate(num_hz: u64, den: u32) -> Result<(), &'static str> {
    if num_hz == 0 || den == 0 {
        return Err("tick rate");
    }
    Ok(())
}

/// At most [`MAX_CHANNELS`] channels.
pub(super) fn channel_count(n: usize) -> Result<(), &'static str> {
    if n > MAX_CHANNELS {
        return Err("channel count");
    }
    Ok(())
}

/// An analog scale divides by a positive denominator.
pub(super) fn scale_den(den: u32) -> Result<(), &'static str> {
    if den == 0 {
        return Err("analog scale denominator");
    }
    Ok(())
}

/// Checks `count − 1` deltas: each minimal LEB128, at most 9 bytes, non-zero, nothing after.
pub(super) fn deltas(bytes: &[u8], count: u16) -> Result<(), DecodeError> {
    // the usual case first: count − 1 single-byte deltas, each 1…127 (a branch-free pass)
    if bytes.len() + 1 == usize::from(count)
        && bytes
            .iter()
            .fold(0u8, |bad, &b| bad | u8::from(b.wrapping_sub(1) >= 0x7F))
            == 0
    {
        return Ok(());
    }
    deltas_each(bytes, count)
}

/// [`deltas`] one delta at a time (any lengths).
fn deltas_each(bytes: &[u8], count: u16) -> Result<(), DecodeError> {
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

#[cfg(test)]
mod tests {
    use super::*;

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
                    deltas(&bytes[..len], count).is_ok(),
                    deltas_each(&bytes[..len], count).is_ok(),
                    "{:?} count {count}",
                    &bytes[..len]
                );
            }
        }
    }
}

//! Checks of field values that decoding and encoding share, and of the timestamp deltas (the
//! one variable-length field that decoding must walk).

use super::codes::{MAX_CHANNELS, MAX_DELTA_BYTES};
use super::error::DecodeError;

/// The last of `count` ticks spaced `step` apart from `first` is at most 2^64 − 1.
pub(super) fn ticks_fit(first: u64, count: u64, step: u64) -> Result<(), DecodeError> {
    count
        .saturating_sub(1)
        .checked_mul(step)
        .and_then(|span| first.checked_add(span))
        .map(|_| ())
        .ok_or(DecodeError::TickOverflow)
}

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

/// Checks `count − 1` deltas: each minimal LEB128, at most 9 bytes, non-zero, nothing after,
/// and the last tick (`first_tick` plus every delta) at most 2^64 − 1.
pub(super) fn deltas(bytes: &[u8], count: u16, first_tick: u64) -> Result<(), DecodeError> {
    // the usual case first: count − 1 single-byte deltas, each 1…127 (a branch-free pass)
    if bytes.len() + 1 == usize::from(count)
        && bytes
            .iter()
            .fold(0u8, |bad, &b| bad | u8::from(b.wrapping_sub(1) >= 0x7F))
            == 0
    {
        // the span is below 127 × count: only a first tick that close to the top needs the sum
        if first_tick <= u64::MAX - 127 * u64::from(count) {
            return Ok(());
        }
        return deltas_each(bytes, count, first_tick);
    }
    deltas_each(bytes, count, first_tick)
}

/// [`deltas`] one delta at a time (any lengths), the ticks added with a check.
fn deltas_each(bytes: &[u8], count: u16, first_tick: u64) -> Result<(), DecodeError> {
    let mut rest = bytes;
    let mut tick = first_tick;
    for _ in 1..count {
        let before = rest.len();
        let (d, r) = unsigned_varint::decode::u64(rest).map_err(|e| match e {
            unsigned_varint::decode::Error::Insufficient => DecodeError::Truncated,
            _ => DecodeError::BadDelta,
        })?;
        if d == 0 || before - r.len() > MAX_DELTA_BYTES {
            return Err(DecodeError::BadDelta);
        }
        tick = tick.checked_add(d).ok_or(DecodeError::TickOverflow)?;
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
                for first in [0, u64::MAX - 2000, u64::MAX - 130, u64::MAX - 1] {
                    assert_eq!(
                        deltas(&bytes[..len], count, first),
                        deltas_each(&bytes[..len], count, first),
                        "{:?} count {count} first {first}",
                        &bytes[..len]
                    );
                }
            }
        }
    }
}

#[cfg(test)]
mod tick_tests {
    use super::*;

    /// Deltas that reach exactly 2^64 − 1 pass; one tick more is refused, in the one-byte
    /// path and in the multi-byte path.
    #[test]
    fn the_last_tick_may_be_the_top_of_the_range_and_no_further() {
        let top = u64::MAX;
        assert_eq!(deltas(&[5, 5], 3, top - 10), Ok(()));
        assert_eq!(deltas(&[5, 6], 3, top - 10), Err(DecodeError::TickOverflow));
        assert_eq!(deltas(&[0x80, 0x01], 2, top - 128), Ok(()));
        assert_eq!(
            deltas(&[0x80, 0x01], 2, top - 127),
            Err(DecodeError::TickOverflow)
        );
        // nine-byte deltas (the largest, < 2^63) add up past the top
        let big = [0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0xFF, 0x7F];
        let mut two = [0u8; 18];
        two[..9].copy_from_slice(&big);
        two[9..].copy_from_slice(&big);
        assert_eq!(deltas(&two, 3, 0), Ok(()));
        assert_eq!(deltas(&two, 3, 2), Err(DecodeError::TickOverflow));
        assert_eq!(ticks_fit(top - 10, 3, 5), Ok(()));
        assert_eq!(ticks_fit(top - 10, 3, 6), Err(DecodeError::TickOverflow));
        assert_eq!(ticks_fit(top, 0, u64::MAX), Ok(()));
        assert_eq!(ticks_fit(0, u64::MAX, 2), Err(DecodeError::TickOverflow));
    }
}

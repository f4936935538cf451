//! Links the protocol crate into a `no_std` static library: a firmware-shaped use of it.
#![no_std]
#![deny(unsafe_op_in_unsafe_fn)]

use firmware_protocol::{Message, StreamDecoder, encode_message};

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    loop {}
}

/// Encode a PING into `out`; returns the wire length (0 on error or a null pointer).
///
/// # Safety
///
/// `out` is null or points to `cap` writable bytes that nothing else reads or writes during
/// the call (`cap` ≤ `isize::MAX`).
#[unsafe(no_mangle)]
pub unsafe extern "C" fn sm_encode_ping(nonce: u32, out: *mut u8, cap: usize) -> usize {
    if out.is_null() {
        return 0;
    }
    // SAFETY: non-null, and the caller promises `cap` writable bytes used by nothing else.
    let out = unsafe { core::slice::from_raw_parts_mut(out, cap) };
    encode_message(&Message::Ping(nonce), 0, out).unwrap_or(0)
}

/// Count the intact frames in a byte buffer (0 for a null pointer).
///
/// # Safety
///
/// `data` is null or points to `len` readable bytes that nothing writes during the call
/// (`len` ≤ `isize::MAX`).
#[unsafe(no_mangle)]
pub unsafe extern "C" fn sm_count_frames(data: *const u8, len: usize) -> u64 {
    if data.is_null() {
        return 0;
    }
    // SAFETY: non-null, and the caller promises `len` readable bytes not written meanwhile.
    let data = unsafe { core::slice::from_raw_parts(data, len) };
    let mut d = StreamDecoder::new();
    let mut n = 0;
    d.push(data, |_| n += 1);
    n
}

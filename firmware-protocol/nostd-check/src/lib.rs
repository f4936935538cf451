//! Links the protocol crate into a `no_std` static library: a firmware-shaped use of it.
#![no_std]

use firmware_protocol::{Message, StreamDecoder, encode_message};

#[panic_handler]
fn panic(_: &core::panic::PanicInfo) -> ! {
    loop {}
}

/// Encode a PING into `out`; returns the wire length (0 on error).
#[unsafe(no_mangle)]
pub extern "C" fn sm_encode_ping(nonce: u32, out: *mut u8, cap: usize) -> usize {
    // SAFETY: the caller passes a valid buffer of `cap` bytes.
    let out = unsafe { core::slice::from_raw_parts_mut(out, cap) };
    encode_message(&Message::Ping(nonce), 0, out).unwrap_or(0)
}

/// Count frames in a byte buffer.
#[unsafe(no_mangle)]
pub extern "C" fn sm_count_frames(data: *const u8, len: usize) -> u64 {
    // SAFETY: the caller passes a valid buffer of `len` bytes.
    let data = unsafe { core::slice::from_raw_parts(data, len) };
    let mut d = StreamDecoder::new();
    let mut n = 0;
    d.push(data, |_| n += 1);
    n
}

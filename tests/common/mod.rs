//! Helpers shared by integration tests: probe byte streams built from protocol messages.
#![allow(dead_code)]

use firmware_protocol::*;

/// The wire bytes of a HELLO (sequence 0) with these channels and tick rate.
pub fn hello_wire(chans: &[Channel<'_>], tick_num_hz: u64, tick_den: u32) -> Vec<u8> {
    let h = Message::Hello(Hello {
        protocol_version: 1,
        tick_num_hz,
        tick_den,
        timebase_ppm: 0,
        max_edge_rate_khz: 0,
        firmware: "test",
        channels: Channels::List(chans),
    });
    let mut w = [0u8; MAX_WIRE];
    let n = encode_message(&h, 0, &mut w).expect("HELLO encodes");
    w[..n].to_vec()
}

//! Helpers shared by integration tests: probe byte streams built from protocol messages.
#![allow(dead_code)]

use firmware_protocol::*;

pub mod firmware;

/// The wire bytes of a HELLO (sequence 0) with these channels and tick rate.
pub fn hello_wire(chans: &[Channel<'_>], tick_num_hz: u64, tick_den: u32) -> Vec<u8> {
    let h = Message::Hello(Hello {
        protocol_version: 1,
        probe_class: 0,
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

/// The wire bytes of `n` equal back-to-back count windows on channel 0 (sequence from 1): each
/// `gate_ticks` long with `edges` counted and `high` of `samples` level samples high.
pub fn count_windows_wire(
    n: u32,
    method: u8,
    gate_ticks: u32,
    edges: u32,
    (samples, high): (u32, u32),
) -> Vec<u8> {
    let mut wire = [0u8; MAX_WIRE];
    let mut bytes = Vec::new();
    for k in 0..n {
        let m = Message::Count(CountWindow {
            channel: 0,
            method,
            start_tick: u64::from(k) * u64::from(gate_ticks),
            gate_ticks,
            edges,
            samples,
            samples_high: high,
        });
        let len = encode_message(&m, (k + 1) as u16, &mut wire).expect("COUNT encodes");
        bytes.extend_from_slice(&wire[..len]);
    }
    bytes
}

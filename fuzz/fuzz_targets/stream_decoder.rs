//! Any bytes, in any chunking, through the stream decoder and the message decoder: no panic,
//! every accepted frame decodes or is rejected cleanly, re-encoding a decoded message is stable.
#![no_main]

use firmware_protocol::{MAX_WIRE, Message, StreamDecoder, encode_message};
use libfuzzer_sys::fuzz_target;

fuzz_target!(|data: &[u8]| {
    let split = data.first().map_or(0, |b| *b as usize) % (data.len().max(1));
    let (a, b) = data.split_at(split);
    let mut d = StreamDecoder::new();
    let mut check = |f: firmware_protocol::RawFrame<'_>| {
        if let Ok(m) = Message::decode(&f) {
            let mut out = [0u8; MAX_WIRE];
            let n = encode_message(&m, f.header.seq, &mut out).expect("a decoded message re-encodes");
            let mut d2 = StreamDecoder::new();
            let mut frames = 0;
            d2.push(&out[..n], |g| {
                frames += 1;
                // reserved bits are not kept, so compare messages, not bytes
                assert_eq!(Message::decode(&g).as_ref(), Ok(&m));
            });
            assert_eq!(frames, 1);
            if let Message::Edges(e) | Message::Lines(e) = m {
                assert_eq!(e.ticks().count(), e.count as usize);
            }
        }
    };
    d.push(a, &mut check);
    d.push(b, &mut check);
    assert!(d.counters.frames <= data.len() as u64);
});

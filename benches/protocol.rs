//! Protocol speed: stream decoding of edge-batch frames (bytes/s), with and without walking
//! every timestamp. Run: `cargo bench --bench protocol`.

use divan::counter::BytesCount;
use firmware_protocol::{
    EdgeWriter, MAX_BODY, MAX_WIRE, Message, StreamDecoder, encode_frame, types,
};

fn main() {
    divan::main();
}

/// 16 MB of full EDGES frames of a ~2 MHz clock at an 8 ns tick (1-byte deltas, some jitter).
fn edge_stream() -> Vec<u8> {
    let mut out = Vec::with_capacity(17 << 20);
    let mut t = 0u64;
    let mut x = 1u64;
    let mut seq = 0u16;
    while out.len() < 16 << 20 {
        let mut body = [0u8; MAX_BODY];
        let mut w = EdgeWriter::new(&mut body, 0, true, 0, t);
        loop {
            x = x.wrapping_mul(6364136223846793005).wrapping_add(1);
            let step = 60 + (x >> 60); // 60..75 ticks
            if !w.push(t + step) {
                break;
            }
            t += step;
        }
        t += 62;
        let n = w.finish();
        let mut wire = [0u8; MAX_WIRE];
        let len = encode_frame(types::EDGES, seq, &body[..n], &mut wire).unwrap();
        out.extend_from_slice(&wire[..len]);
        seq = seq.wrapping_add(1);
    }
    out
}

#[divan::bench]
fn frames_only(bencher: divan::Bencher) {
    let s = edge_stream();
    bencher.counter(BytesCount::new(s.len())).bench_local(|| {
        let mut d = StreamDecoder::new();
        let mut n = 0usize;
        for chunk in s.chunks(64 * 1024) {
            d.push(chunk, |f| n += f.body.len());
        }
        n
    });
}

#[divan::bench]
fn frames_and_every_timestamp(bencher: divan::Bencher) {
    let s = edge_stream();
    bencher.counter(BytesCount::new(s.len())).bench_local(|| {
        let mut d = StreamDecoder::new();
        let mut sum = 0u64;
        for chunk in s.chunks(64 * 1024) {
            d.push(chunk, |f| {
                if let Ok(Message::Edges(e)) = Message::decode(&f) {
                    sum = sum.wrapping_add(e.ticks().fold(0u64, |a, t| a ^ t));
                }
            });
        }
        sum
    });
}

//! The streaming decoder against published framing values and against damaged streams.

use firmware_protocol::*;

/// xorshift64*: a small deterministic generator for test streams.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 >> 12;
        self.0 ^= self.0 << 25;
        self.0 ^= self.0 >> 27;
        self.0.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

fn unhex(s: &str) -> Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

fn cobs_with_delimiter(data: &[u8]) -> Vec<u8> {
    let mut out = vec![0u8; cobs::max_encoding_length(data.len()) + 1];
    let n = cobs::encode(data, &mut out);
    out[n] = 0;
    out.truncate(n + 1);
    out
}

#[test]
fn crc_check_values_from_the_catalogue() {
    // Catalogue of parametrised CRC algorithms (REFERENCES.md §7): CRC-32/ISO-HDLC check 0xCBF43926.
    assert_eq!(crc32(b"123456789"), 0xCBF4_3926);
    // and the empty message (init 0xFFFFFFFF, xorout 0xFFFFFFFF → 0)
    assert_eq!(crc32(b""), 0);
}

#[test]
fn cobs_examples_from_the_paper() {
    // Cheshire & Baker, IEEE/ACM Trans. Networking 1999, examples as in REFERENCES.md §7.
    let cases: &[(&str, &str)] = &[
        ("00", "010100"),
        ("0000", "01010100"),
        ("001100", "0102110100"),
        ("11220033", "031122023300"),
        ("11223344", "051122334400"),
        ("11000000", "021101010100"),
    ];
    for (raw, enc) in cases {
        assert_eq!(cobs_with_delimiter(&unhex(raw)), unhex(enc), "{raw}");
    }
    let run: Vec<u8> = (1..=0xFE).collect();
    let mut want = vec![0xFF];
    want.extend(&run);
    want.push(0);
    assert_eq!(cobs_with_delimiter(&run), want, "254 bytes 01..FE");
    let mut run0 = vec![0u8];
    run0.extend(1..=0xFEu8);
    let mut want0 = vec![0x01, 0xFF];
    want0.extend(1..=0xFEu8);
    want0.push(0);
    assert_eq!(cobs_with_delimiter(&run0), want0, "255 bytes 00 01..FE");
    // maximum overhead ⌈n/254⌉ (at least 1), plus our delimiter
    for n in [0usize, 1, 253, 254, 255, 1024] {
        assert!(cobs::max_encoding_length(n) <= n + n.div_ceil(254).max(1));
    }
}

fn vector_stream() -> Vec<u8> {
    let text =
        std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/vectors/messages.vec"))
            .unwrap();
    let mut s = vec![0x55, 0xAA, 0x13]; // garbage before the first delimiter
    s.push(0);
    for line in text.lines() {
        if let Some(w) = line.strip_prefix("wire ") {
            s.extend(unhex(w));
        }
    }
    s
}

fn decode_all(chunks: &[&[u8]]) -> (Vec<(u8, u16, Vec<u8>)>, Counters) {
    let mut d = StreamDecoder::new();
    let mut got = Vec::new();
    for c in chunks {
        d.push(c, |f| {
            got.push((f.header.msg_type, f.header.seq, f.body.to_vec()))
        });
    }
    (got, d.counters)
}

#[test]
fn stream_split_at_every_byte_boundary_gives_the_same_frames() {
    let s = vector_stream();
    let (whole, counters) = decode_all(&[&s]);
    // every vector is an intact frame; those whose sequence number lies behind the one before
    // are dropped as out of order (the vectors' numbers are not one sequence)
    assert_eq!(
        whole.len() as u64 + counters.out_of_order + counters.duplicates,
        s.iter().filter(|&&b| b == 0).count() as u64 - 1
    );
    assert!(whole.len() >= 10);
    assert_eq!(
        counters.cobs_errors + counters.runts,
        1,
        "the garbage prefix is one bad frame"
    );
    for cut in 0..=s.len() {
        let (a, b) = s.split_at(cut);
        let (got, c) = decode_all(&[a, b]);
        assert_eq!(got, whole, "cut at {cut}");
        assert_eq!(c, counters, "cut at {cut}");
    }
}

#[test]
fn stream_in_random_chunkings_gives_the_same_frames() {
    let s = vector_stream();
    let (whole, counters) = decode_all(&[&s]);
    let mut rng = Rng(0x1234_5678_9abc_def1);
    for _ in 0..2000 {
        let mut chunks = Vec::new();
        let mut i = 0;
        while i < s.len() {
            let n = 1 + rng.below(40) as usize;
            let j = (i + n).min(s.len());
            chunks.push(&s[i..j]);
            i = j;
        }
        let (got, c) = decode_all(&chunks);
        assert_eq!(got, whole);
        assert_eq!(c, counters);
    }
}

#[test]
fn oversized_runs_are_skipped_and_memory_stays_one_frame() {
    let mut d = StreamDecoder::new();
    let mut n = 0;
    let junk = vec![0x42u8; 100_000];
    d.push(&junk, |_| n += 1);
    d.push(&[0], |_| n += 1);
    let mut wire = [0u8; MAX_WIRE];
    let len = encode_message(&Message::Ping(5), 0, &mut wire).unwrap();
    d.push(&wire[..len], |_| n += 1);
    assert_eq!(n, 1);
    assert_eq!(d.counters.oversized, 1);
    assert!(std::mem::size_of::<StreamDecoder>() < 2 * MAX_WIRE);
}

fn ping(seq: u16, nonce: u32) -> Vec<u8> {
    let mut wire = [0u8; MAX_WIRE];
    let n = encode_message(&Message::Ping(nonce), seq, &mut wire).unwrap();
    wire[..n].to_vec()
}

/// Frames through a fresh decoder: the sequence numbers delivered, and the counters.
fn deliver(frames: &[Vec<u8>]) -> (Vec<u16>, Counters) {
    let mut d = StreamDecoder::new();
    let mut got = Vec::new();
    for f in frames {
        d.push(f, |f| got.push(f.header.seq));
    }
    (got, d.counters)
}

fn hello_frame(seq: u16) -> Vec<u8> {
    let hello = Message::Hello(Hello {
        protocol_version: 1,
        probe_class: 0,
        tick_num_hz: 1,
        tick_den: 1,
        timebase_ppm: 0,
        max_edge_rate_khz: 0,
        firmware: "x",
        channels: Channels::List(&[]),
    });
    let mut wire = [0u8; MAX_WIRE];
    let n = encode_message(&hello, seq, &mut wire).unwrap();
    wire[..n].to_vec()
}

#[test]
fn sequence_gaps_are_counted_and_hello_restarts_them() {
    let mut frames: Vec<Vec<u8>> = [0u16, 1, 2, 5, 6, 7, 65535]
        .iter()
        .map(|&s| ping(s, u32::from(s)))
        .collect();
    frames.push(ping(0, 99)); // number 0 again, other content: late, not a copy
    let (got, c) = deliver(&frames);
    // 2 → 5 loses 3 and 4; 65535 and 0 lie behind 8: late, dropped, counted, the expectation kept
    assert_eq!(got, [0, 1, 2, 5, 6, 7]);
    assert_eq!(c.seq_gaps, 1);
    assert_eq!(c.lost_frames, 2);
    assert_eq!(c.out_of_order, 2);
    assert_eq!(c.duplicates, 0);
    let mut d = StreamDecoder::new();
    for f in &frames {
        d.push(f, |_| {});
    }
    // a HELLO numbered 0 is a reset: a restart, not a gap
    d.push(&hello_frame(0), |_| {});
    d.push(&ping(1, 0), |_| {});
    assert_eq!(d.counters.seq_gaps, 1, "HELLO 0 is a restart, not a gap");
    assert_eq!(d.counters.frames, 8);
    // a HELLO ahead (a probe that kept running answering DESCRIBE after an outage) counts the
    // frames between as lost, and says so on the frame
    let mut lost_at = Vec::new();
    d.push(&hello_frame(40), |f| lost_at.push(f.lost_before));
    d.push(&ping(41, 0), |f| lost_at.push(f.lost_before));
    assert_eq!(lost_at, [38, 0]);
    assert_eq!(d.counters.lost_frames, 2 + 38);
}

/// A sequence number seen again with the same content is a copy: dropped, counted, and the
/// frames after it are neither lost nor late.
#[test]
fn duplicated_frames_are_dropped_once_counted() {
    let f: Vec<Vec<u8>> = (0..10u16).map(|s| ping(s, 7)).collect();
    let stream = vec![
        f[0].clone(),
        f[1].clone(),
        f[1].clone(), // the last frame again
        f[2].clone(),
        f[3].clone(),
        f[1].clone(), // an older one again
        f[4].clone(),
        f[4].clone(),
        f[4].clone(),
        f[5].clone(),
    ];
    let (got, c) = deliver(&stream);
    assert_eq!(got, [0, 1, 2, 3, 4, 5]);
    assert_eq!(c.duplicates, 4);
    assert_eq!(c.frames, 6);
    assert_eq!((c.lost_frames, c.seq_gaps, c.out_of_order), (0, 0, 0));
    // a copy of the HELLO is no second restart
    let (got, c) = deliver(&[hello_frame(0), hello_frame(0), ping(1, 0)]);
    assert_eq!(got, [0, 1]);
    assert_eq!(c.duplicates, 1);
    // the same HELLO again after other frames answers another DESCRIBE (a sender restarts its
    // numbers at every HELLO, so it is byte for byte the first): delivered, not a copy
    let (got, c) = deliver(&[hello_frame(0), ping(1, 0), ping(2, 0), hello_frame(0)]);
    assert_eq!(got, [0, 1, 2, 0]);
    assert_eq!(c.duplicates, 0);
}

/// One frame out of place costs what it costs and no more: a swapped pair is one lost (at the
/// jump) and one late frame; a stale frame from far back moves nothing.
#[test]
fn one_out_of_order_frame_is_not_dozens_lost() {
    let f: Vec<Vec<u8>> = (0..200u16).map(|s| ping(s, u32::from(s))).collect();
    // 0..=100, then 50 (stale), then 101..=120
    let mut stream: Vec<Vec<u8>> = f[..=100].to_vec();
    stream.push(ping(50, 0xBAD)); // same number, other content: not a copy of frame 50
    stream.extend_from_slice(&f[101..=120]);
    let (got, c) = deliver(&stream);
    assert_eq!(got.len(), 121);
    assert_eq!(c.out_of_order, 1);
    assert_eq!(c.lost_frames, 0);
    assert_eq!(c.seq_restarts, 0);
    // 0..=9, 11, 10, 12..=20: 10 is late (already counted lost at 9 → 11)
    let mut stream: Vec<Vec<u8>> = f[..=9].to_vec();
    stream.push(f[11].clone());
    stream.push(f[10].clone());
    stream.extend_from_slice(&f[12..=20]);
    let (got, c) = deliver(&stream);
    assert_eq!(got.len(), 20);
    assert!(!got.contains(&10));
    assert_eq!((c.lost_frames, c.out_of_order, c.seq_gaps), (1, 1, 1));
}

/// A sender that restarts its numbers without a HELLO (the HELLO lost): after two successive
/// frames far behind, tracking follows the new numbers.
#[test]
fn a_restart_without_hello_is_followed() {
    let mut stream: Vec<Vec<u8>> = (1000..1100u16).map(|s| ping(s, 1)).collect();
    stream.extend((0..50u16).map(|s| ping(s, 2)));
    let (got, c) = deliver(&stream);
    assert_eq!(c.seq_restarts, 1);
    assert_eq!(
        c.out_of_order, 1,
        "the first frame of the restart is dropped"
    );
    assert_eq!(got.len(), 100 + 49);
    assert_eq!(c.lost_frames, 0);
}

/// One million frames; about a fifth damaged by a bit flip, a dropped byte or an inserted byte.
/// No damaged frame may be accepted, and every frame whose content survives between two
/// delimiters must be recovered. The oracle: COBS decodes each run between 0x00 bytes on its
/// own, so a frame is recoverable exactly when its original content bytes are still contiguous
/// in the stream with a 0x00 (or the stream start) right before and a 0x00 right after.
#[test]
fn a_million_frames_with_random_damage() {
    const N: u32 = 1_000_000;
    let mut rng = Rng(0xfeed_beef_cafe_f00d);
    let mut stream = Vec::with_capacity(N as usize * 40);
    // (frame number, offset of its content in the stream, content length), content intact
    let mut survivors: Vec<(u32, usize, usize)> = Vec::new();
    let mut wire = [0u8; MAX_WIRE];
    let mut damaged = 0u32;
    for i in 0..N {
        // body: the frame number and some bytes derived from it (zeros included)
        let mut body = [0u8; 24];
        body[..4].copy_from_slice(&i.to_le_bytes());
        let len = 4 + (rng.below(20) as usize);
        for b in &mut body[4..len] {
            *b = (rng.below(4) as u8) * 0x55;
        }
        let n = encode_frame(0x02, i as u16, &body[..len], &mut wire).unwrap();
        let content = n - 1; // without the delimiter
        let mut f = wire[..n].to_vec();
        let mut content_at = Some(0usize);
        if rng.below(5) == 0 {
            damaged += 1;
            let at = rng.below(n as u64) as usize;
            match rng.below(3) {
                0 => f[at] ^= 1 << rng.below(8),
                1 => {
                    f.remove(at);
                }
                _ => f.insert(at, rng.below(256) as u8),
            }
            // where the original content still lies untouched, if anywhere
            content_at = if at == content {
                Some(0) // the delimiter itself was hit (or something inserted before it)
            } else if at == 0 && f.len() == n + 1 {
                Some(1) // a byte inserted in front
            } else {
                None
            };
            if let Some(o) = content_at
                && f.get(o..o + content) != Some(&wire[..content])
            {
                content_at = None;
            }
        }
        if let Some(o) = content_at {
            survivors.push((i, stream.len() + o, content));
        }
        stream.extend_from_slice(&f);
    }
    let expect_ok: Vec<u32> = survivors
        .iter()
        .filter(|&&(_, at, len)| {
            (at == 0 || stream[at - 1] == 0) && stream.get(at + len) == Some(&0)
        })
        .map(|s| s.0)
        .collect();
    let mut d = StreamDecoder::new();
    let mut got = Vec::with_capacity(expect_ok.len());
    let mut bad_content = 0;
    for chunk in stream.chunks(4093) {
        d.push(chunk, |f| {
            let i = u32::from_le_bytes([f.body[0], f.body[1], f.body[2], f.body[3]]);
            if f.header.seq != i as u16 {
                bad_content += 1;
            }
            got.push(i);
        });
    }
    assert_eq!(bad_content, 0, "a damaged frame was accepted");
    if got != expect_ok {
        let first = got.iter().zip(&expect_ok).position(|(a, b)| a != b);
        panic!(
            "recovered {} frames, expected {}; first difference at index {first:?}: got {:?}, expected {:?}",
            got.len(),
            expect_ok.len(),
            first.map(|k| got[k]),
            first.map(|k| expect_ok[k])
        );
    }
    let rejected = d.counters.rejected();
    println!(
        "{N} frames, {damaged} damaged, {} recovered, {rejected} rejected runs, counters {:?}",
        got.len(),
        d.counters
    );
    assert_eq!(d.counters.frames, got.len() as u64);
    assert!(
        rejected >= u64::from(damaged) / 2,
        "damage must show in the counters"
    );
    assert!(d.counters.lost_frames > 0);
}

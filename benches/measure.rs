//! Measurement engine speed: clock statistics from decoded edges, and decode + engine from raw
//! edge frames. Run: `cargo bench --bench measure`.

use divan::counter::ItemsCount;
use slackmeter::measure::clock::{ClockConfig, ClockState};
use slackmeter::measure::{EngineConfig, Feed};
use slackmeter::sim::{BenchModel, SimProbe};

fn main() {
    divan::main();
}

fn frames(seconds: f64) -> (Vec<u8>, u64) {
    let mut m = BenchModel::scenario("steady").unwrap();
    m.jitter_rms_ns = 1.0;
    m.rails.clear();
    let mut p = SimProbe::new(m, Vec::new());
    p.start();
    p.run_until(seconds * 1e9);
    p.flush_all();
    let edges = p.edges_sent;
    (std::mem::take(p.output()), edges)
}

/// Edges in one full EDGES frame of single-byte deltas (a 1024-byte frame).
const EDGES_PER_FRAME: usize = 1000;

/// Decoded edge ticks of the same stream (what the engine's clock sees).
fn ticks(bytes: &[u8]) -> Vec<u64> {
    let mut out = Vec::new();
    let mut d = firmware_protocol::StreamDecoder::new();
    d.push(bytes, |f| {
        if let Ok(firmware_protocol::Message::Edges(e)) = firmware_protocol::Message::decode(&f) {
            out.extend(e.ticks());
        }
    });
    out
}

#[divan::bench]
fn clock_stats_from_decoded_edges(bencher: divan::Bencher) {
    let (bytes, _) = frames(2.0);
    let t = ticks(&bytes);
    bencher.counter(ItemsCount::new(t.len())).bench_local(|| {
        // in batches of a full EDGES frame's size, as the engine hands them over
        let mut s = ClockState::new(ClockConfig::default(), 8.0);
        for b in t.chunks(EDGES_PER_FRAME) {
            s.edges(b, true);
        }
        s.acc.as_ref().map(|a| a.period.n)
    });
}

#[divan::bench]
fn decode_and_engine_from_raw_frames(bencher: divan::Bencher) {
    let (bytes, edges) = frames(2.0);
    bencher.counter(ItemsCount::new(edges)).bench_local(|| {
        let mut f = Feed::new(EngineConfig::default());
        for chunk in bytes.chunks(64 * 1024) {
            f.push(chunk);
        }
        f.engine
            .snapshot(slackmeter::measure::Window::Session)
            .clocks
            .len()
    });
}

/// The peer comparison's input: the same edges as raw little-endian u64 ticks in a file.
pub const PEER_FILE: &str = "/tmp/slackmeter-peer-edges.u64";

fn peer_file() -> usize {
    let (bytes, _) = frames(4.0);
    let t = ticks(&bytes);
    let mut raw = Vec::with_capacity(t.len() * 8);
    for x in &t {
        raw.extend_from_slice(&x.to_le_bytes());
    }
    std::fs::write(PEER_FILE, raw).expect("write the peer file");
    t.len()
}

/// Edges per read in the peer comparison (64 KiB).
const READ_EDGES: usize = 8192;

/// Fill `buf` from `f` as far as the file goes; returns the bytes read.
fn read_full(f: &mut std::fs::File, buf: &mut [u8]) -> usize {
    use std::io::Read;
    let mut got = 0;
    while got < buf.len() {
        match f.read(&mut buf[got..]) {
            Ok(0) => break,
            Ok(k) => got += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => panic!("reading the peer file: {e}"),
        }
    }
    got
}

/// End to end like the NumPy peer (benches/peer_numpy.py): read the file, compute the clock
/// statistics, take a snapshot.
#[divan::bench]
fn peer_read_file_and_clock_stats(bencher: divan::Bencher) {
    let n = peer_file();
    bencher.counter(ItemsCount::new(n)).bench_local(|| {
        // read in 64 KiB pieces into one reused buffer (no 128 MB allocation to fault in)
        let mut f = std::fs::File::open(PEER_FILE).expect("peer file");
        let mut s = ClockState::new(ClockConfig::default(), 8.0);
        let mut raw = vec![0u8; 8 * READ_EDGES];
        let mut ticks = vec![0u64; READ_EDGES];
        let mut rising = true;
        loop {
            let got = read_full(&mut f, &mut raw);
            let n = got / 8;
            for (t, c) in ticks.iter_mut().zip(raw[..8 * n].chunks_exact(8)) {
                *t = u64::from_le_bytes(c.try_into().expect("8 bytes"));
            }
            s.edges(&ticks[..n], rising);
            rising ^= n % 2 == 1;
            if got < raw.len() {
                break;
            }
        }
        slackmeter::measure::clock::snapshot(0, "CLK", s.acc.as_ref(), &s, 0, false)
            .period_jitter_rms_ns
    });
}

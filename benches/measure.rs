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
        let mut s = ClockState::new(ClockConfig::default(), 8.0);
        let mut rising = true;
        for &x in &t {
            s.edge(x, rising);
            rising = !rising;
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

/// End to end like the NumPy peer (benches/peer_numpy.py): read the file, compute the clock
/// statistics, take a snapshot.
#[divan::bench]
fn peer_read_file_and_clock_stats(bencher: divan::Bencher) {
    let n = peer_file();
    bencher.counter(ItemsCount::new(n)).bench_local(|| {
        let raw = std::fs::read(PEER_FILE).expect("peer file");
        let mut s = ClockState::new(ClockConfig::default(), 8.0);
        let mut rising = true;
        for c in raw.chunks_exact(8) {
            s.edge(u64::from_le_bytes(c.try_into().expect("8 bytes")), rising);
            rising = !rising;
        }
        slackmeter::measure::clock::snapshot(0, "CLK", s.acc.as_ref(), &s, 0, false)
            .period_jitter_rms_ns
    });
}

//! Measurement engine speed: clock statistics from decoded edges, and decode + engine from raw
//! edge frames. Run: `cargo bench --bench measure` (the NumPy comparison: `--bench peer`).

mod common;

use common::{frames, ticks};
use divan::counter::ItemsCount;
use slackmeter::measure::clock::{ClockConfig, ClockState};
use slackmeter::measure::{EngineConfig, Feed};

fn main() {
    divan::main();
}

/// Edges in one full EDGES frame of single-byte deltas (a 1024-byte frame).
const EDGES_PER_FRAME: usize = 1000;

#[divan::bench]
fn clock_stats_from_decoded_edges(bencher: divan::Bencher) {
    let (bytes, _) = frames(2.0, 1.0);
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
    let (bytes, edges) = frames(2.0, 1.0);
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

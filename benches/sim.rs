//! Virtual probe speed: edges per second written as protocol frames (the `sim --out` path,
//! without the disk). Run: `cargo bench --bench sim`.

use divan::counter::ItemsCount;
use slackmeter::sim::{BenchModel, SimProbe};

fn main() {
    divan::main();
}

fn edges_in(seconds: f64, model: BenchModel) -> u64 {
    let mut p = SimProbe::new(model, Vec::new());
    p.start();
    p.run_until(seconds * 1e9);
    p.flush_all();
    p.output().clear();
    p.edges_sent
}

#[divan::bench]
fn steady_2mhz_one_second(bencher: divan::Bencher) {
    let m = BenchModel::scenario("steady").unwrap();
    let n = edges_in(1.0, m.clone());
    bencher
        .counter(ItemsCount::new(n))
        .bench_local(|| edges_in(1.0, divan::black_box(m.clone())));
}

#[divan::bench]
fn jittery_8mhz_glitches_one_second(bencher: divan::Bencher) {
    let mut m = BenchModel::scenario("sagging").unwrap();
    m.freq_hz = 8e6;
    m.jitter_rms_ns = 2.0;
    let n = edges_in(1.0, m.clone());
    bencher
        .counter(ItemsCount::new(n))
        .bench_local(|| edges_in(1.0, divan::black_box(m.clone())));
}

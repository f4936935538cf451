//! Peak memory of a long session: the virtual probe's frames for `EDGES` edges (default 10^9)
//! streamed through the engine in chunks, then the peak resident set (VmHWM) is printed.
//! Run: `cargo run --release --example long_session -- 1000000000`

use slackmeter::measure::{EngineConfig, Feed, Window};
use slackmeter::sim::{BenchModel, SimProbe};

fn vm_hwm_kb() -> Option<u64> {
    let s = std::fs::read_to_string("/proc/self/status").ok()?;
    s.lines()
        .find_map(|l| l.strip_prefix("VmHWM:"))
        .and_then(|v| v.trim().trim_end_matches("kB").trim().parse().ok())
}

fn main() {
    let target: u64 = std::env::args()
        .nth(1)
        .and_then(|a| a.parse().ok())
        .unwrap_or(1_000_000_000);
    let mut m = BenchModel::scenario("sagging").unwrap();
    m.freq_hz = 8e6;
    m.jitter_rms_ns = 1.0;
    let mut probe = SimProbe::new(m, vec![]);
    probe.start();
    let mut feed = Feed::new(EngineConfig::default());
    let started = std::time::Instant::now();
    let mut t = 0.0;
    while probe.edges_sent < target {
        t += 50e6;
        probe.run_until(t);
        let out = std::mem::take(probe.output());
        feed.push(&out);
    }
    let s = feed.engine.snapshot(Window::Session);
    let c = s.clock().unwrap();
    println!(
        "{} edges ({} cycles, {:.0} s of probe time) in {:.1} s; peak RSS {} MB; f = {:.3} Hz, glitches {}",
        c.edges,
        c.cycles,
        s.probe_time_s,
        started.elapsed().as_secs_f64(),
        vm_hwm_kb().unwrap_or(0) / 1024,
        c.frequency_hz.unwrap_or(0.0),
        c.glitches
    );
}

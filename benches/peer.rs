//! The engine beside a NumPy peer (`benches/peer_numpy.py`), end to end from the same file of raw
//! little-endian u64 edge ticks: read, compute the clock statistics, take a snapshot. Rounds
//! alternate the two so that a change in the host's load falls on both.
//! Run: `cargo bench --bench peer` (the peer needs python3 with NumPy; without it only the
//! engine's time is printed).

mod common;

use slackmeter::measure::clock::{ClockConfig, ClockSnapshot, ClockState, snapshot};
use std::io::Read;
use std::process::Command;
use std::time::{Duration, Instant};

/// The shared input.
const PEER_FILE: &str = "/tmp/slackmeter-peer-edges.u64";
/// Edges per read (64 KiB).
const READ_EDGES: usize = 8192;
/// Rounds of (engine best of `RUNS`, peer best of 5).
const ROUNDS: usize = 5;
const RUNS: usize = 7;

fn main() {
    // the demo clock as the virtual probe gives it, and with the most jitter the closed-loop
    // calibration covers (wider histograms)
    for jitter_rms_ns in [1.0, 20.0] {
        println!("== 2 MHz demo clock, {jitter_rms_ns} ns RMS jitter, 8 ns tick");
        compare_once(jitter_rms_ns);
    }
}

/// Write the edges of 4 s of the demo clock to the shared file, then the rounds.
fn compare_once(jitter_rms_ns: f64) {
    let (bytes, _) = common::frames(4.0, jitter_rms_ns);
    let mut t = common::ticks(&bytes);
    // an even number of edges, the last a fall: the engine holds the newest edge back until the
    // next one comes, so both then see the same periods
    t.truncate(t.len() / 2 * 2);
    let raw: Vec<u8> = t.iter().flat_map(|x| x.to_le_bytes()).collect();
    std::fs::write(PEER_FILE, raw).expect("write the peer file");
    println!("{} edges in {PEER_FILE}", t.len());
    drop((bytes, t));

    let mut ours_best = Duration::MAX;
    let mut peer_best: Option<f64> = None;
    let mut snap = None;
    let mut peer_figures = None;
    for round in 1..=ROUNDS {
        let mut ours = Duration::MAX;
        for _ in 0..RUNS {
            let t0 = Instant::now();
            let s = engine_end_to_end();
            ours = ours.min(t0.elapsed());
            snap = Some(s);
        }
        ours_best = ours_best.min(ours);
        let ours_ms = ours.as_secs_f64() * 1e3;
        match run_peer() {
            Ok(v) => {
                let ms = v["best_ms"].as_f64().unwrap_or(f64::NAN);
                peer_best = Some(peer_best.map_or(ms, |b: f64| b.min(ms)));
                println!(
                    "round {round}: engine {ours_ms:.1} ms, NumPy {ms:.1} ms: {:.2}× faster",
                    ms / ours_ms
                );
                peer_figures = Some(v);
            }
            Err(why) => println!("round {round}: engine {ours_ms:.1} ms; peer not run: {why}"),
        }
    }
    let ours_ms = ours_best.as_secs_f64() * 1e3;
    if let Some(p) = peer_best {
        println!(
            "best of all rounds: engine {ours_ms:.1} ms, NumPy {p:.1} ms: {:.2}× faster",
            p / ours_ms
        );
    }
    if let (Some(s), Some(v)) = (snap, peer_figures) {
        compare(&s, &v);
    }
}

/// Read the file in 64 KiB pieces straight into one reused tick buffer, feed the clock
/// statistics, take the snapshot.
fn engine_end_to_end() -> ClockSnapshot {
    let mut f = std::fs::File::open(PEER_FILE).expect("peer file");
    let mut s = ClockState::new(ClockConfig::default(), 8.0);
    let mut ticks = vec![0u64; READ_EDGES];
    let mut rising = true;
    loop {
        let got = read_full(&mut f, bytemuck::cast_slice_mut(&mut ticks));
        let n = got / 8;
        for t in &mut ticks[..n] {
            *t = u64::from_le(*t); // no-op on little-endian hosts
        }
        s.edges(&ticks[..n], rising);
        rising ^= n % 2 == 1;
        if got < 8 * READ_EDGES {
            break;
        }
    }
    snapshot(0, "CLK", s.acc.as_ref(), &s, 0, false, 0)
}

/// Fill `buf` from `f` as far as the file goes; returns the bytes read.
fn read_full(f: &mut std::fs::File, buf: &mut [u8]) -> usize {
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

/// Run the NumPy peer; its figures and best time as JSON.
fn run_peer() -> Result<serde_json::Value, String> {
    let script = concat!(env!("CARGO_MANIFEST_DIR"), "/benches/peer_numpy.py");
    let out = Command::new("python3")
        .args([script, PEER_FILE, "--json"])
        .output()
        .map_err(|e| format!("python3: {e}"))?;
    if !out.status.success() {
        let err = String::from_utf8_lossy(&out.stderr);
        return Err(err.lines().last().unwrap_or("failed").to_string());
    }
    serde_json::from_slice(&out.stdout).map_err(|e| format!("peer output: {e}"))
}

/// The figures both compute, side by side.
fn compare(s: &ClockSnapshot, v: &serde_json::Value) {
    let pc = s.period_percentiles.as_ref();
    let rows = [
        ("periods", Some(s.period_jitter_n as f64)),
        ("period_mean_ns", s.period_mean_ns),
        ("period_min_ns", s.period_min_ns),
        ("period_max_ns", s.period_max_ns),
        ("high_mean_ns", s.high_mean_ns),
        ("high_min_ns", s.high_min_ns),
        ("low_min_ns", s.low_min_ns),
        ("duty", s.duty),
        ("period_jitter_rms_ns", s.period_jitter_rms_ns),
        ("cycle_to_cycle_rms_ns", s.cycle_to_cycle_rms_ns),
        ("period_p1_ns", pc.map(|p| p.p1)),
        ("period_p50_ns", pc.map(|p| p.p50)),
        ("period_p99_ns", pc.map(|p| p.p99)),
    ];
    println!("{:<24}{:>20}{:>20}", "figure", "engine", "NumPy");
    for (name, ours) in rows {
        let peer = v[name].as_f64();
        let fmt = |x: Option<f64>| x.map_or("-".to_string(), |x| format!("{x:.9}"));
        // equal to a part in 10^9 (the two sum in different orders); to a part in 10^6, one
        // sample of 8 M more or less at an end of the file
        let rel = match (ours, peer) {
            (Some(a), Some(b)) => (a - b).abs() / a.abs().max(b.abs()).max(1.0),
            _ => f64::INFINITY,
        };
        let verdict = match rel {
            r if r <= 1e-9 => "same",
            r if r <= 1e-6 => "same but one sample",
            _ => "DIFFERS",
        };
        println!("{name:<24}{:>20}{:>20}  {verdict}", fmt(ours), fmt(peer));
    }
}

//! The two clock paths against each other: the per-edge reference path and the bulk path must
//! leave identical state (field by field, floats included) for any stream and any batching.

use super::config::{ClockConfig, REFRESH};
use super::state::ClockState;
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;

/// A stream of (tick, rising) with the troubles a bench sees: jitter, glitches next to
/// edges, runts ending just before an edge, a stall inside the first period, stalls, a dropped edge (polarity break), time
/// running backwards (a probe restart).
fn stream(seed: u64, n: usize) -> Vec<(u64, bool)> {
    let mut r = Xoshiro256PlusPlus::seed_from_u64(seed);
    let period = r.random_range(3..5000u64);
    let duty = r.random_range(0.1..0.9);
    let jitter = r.random_range(0..=period / 8 + 1);
    let trouble = r.random_range(0.0..0.02);
    let mut out = Vec::with_capacity(n);
    let mut t = r.random_range(0..1u64 << 40);
    let mut rising = r.random_bool(0.5);
    // now and then a start inside a stall: the first period is ten long (a new seed follows)
    if r.random_bool(0.25) {
        out.push((t, rising));
        rising = !rising;
        t += period / 2 + 1;
        out.push((t, rising));
        rising = !rising;
        t += 10 * period;
    }
    while out.len() < n {
        let base = if rising {
            (period as f64 * (1.0 - duty)) as u64
        } else {
            (period as f64 * duty) as u64
        };
        t += base.max(1) + r.random_range(0..=jitter);
        if r.random_bool(trouble) {
            match r.random_range(0..6) {
                // a glitch: a short pulse right after this edge
                0 => {
                    out.push((t, rising));
                    t += 1;
                    out.push((t, !rising));
                    t += 1;
                }
                // a runt that ends a tick before this edge, inside the phase it closes
                5 if base > 6 => {
                    let w = r.random_range(1..=base / 3);
                    out.push((t - w - 1, rising));
                    out.push((t - 1, !rising));
                }
                1 => t += period * r.random_range(5..50),
                2 => rising = !rising,
                3 => t = t.saturating_sub(period * r.random_range(1..100)).max(1),
                _ => t += period * r.random_range(2..4),
            }
        }
        out.push((t, rising));
        rising = !rising;
    }
    out
}

fn config(seed: u64) -> ClockConfig {
    let mut c = ClockConfig::default();
    if seed.is_multiple_of(3) {
        c.tie_record = 100 + seed as usize % 200;
        c.n_cycles = [3, 40];
        c.allan_tau0_s = 1e-7;
    }
    if seed.is_multiple_of(5) {
        c.glitch_ns = Some(4.0);
    }
    c
}

/// Per-edge and bulk give the same channel state, field by field (floats included), after
/// random batches and at the end, over random batchings and continuity breaks.
#[test]
fn bulk_equals_per_edge() {
    for seed in 0..200u64 {
        let edges = stream(seed, 3000 + (seed as usize * 37) % 5000);
        let cfg = config(seed);
        let tick_ns = [8.0, 62.5, 2.0][seed as usize % 3];
        let mut one = ClockState::new(cfg.clone(), tick_ns);
        let mut bulk = ClockState::new(cfg, tick_ns);
        let mut r = Xoshiro256PlusPlus::seed_from_u64(seed ^ 0xABCD);
        let mut i = 0;
        while i < edges.len() {
            let len = r.random_range(1..1200).min(edges.len() - i);
            // a batch as a probe sends it: alternating from its first polarity
            let first = edges[i].1;
            let ticks: Vec<u64> = edges[i..i + len].iter().map(|e| e.0).collect();
            if r.random_bool(0.05) {
                one.break_continuity();
                bulk.break_continuity();
            }
            for (k, &t) in ticks.iter().enumerate() {
                one.edge(t, first ^ (k % 2 == 1));
            }
            bulk.edges(&ticks, first);
            i += len;
            // the whole state (three 4095-bucket histograms) now and then, and at the end
            if i == edges.len() || r.random_bool(0.1) {
                assert_eq!(
                    format!("{one:?}"),
                    format!("{bulk:?}"),
                    "seed {seed}, after edge {i}"
                );
            }
        }
        assert!(
            one.acc.as_ref().is_some_and(|a| a.period.n > 0),
            "seed {seed}"
        );
    }
}

/// A clean stream goes almost entirely through the bulk path (so the test above tests it).
#[test]
fn clean_stream_is_taken_in_bulk() {
    let mut s = ClockState::new(ClockConfig::default(), 8.0);
    let ticks: Vec<u64> = (0..100_000u64).map(|k| 1000 + k * 31 + (k % 3)).collect();
    let (steps, unscanned) = s.edges_here(&ticks, true);
    // 50 000 periods in steps of at most one refresh segment, nearly all of them full, and
    // all but the first few taken without the scan
    assert!(
        unscanned + 3 >= steps,
        "{unscanned} of {steps} steps unscanned"
    );
    let full = 50_000 / REFRESH as usize;
    assert!(steps >= full && steps <= 2 * full + 2, "{steps} bulk steps");
}

//! The measurement engine on hand-built edge lists and synthetic stamps, checked against the
//! published definitions and worked values in docs/REFERENCES.md §8.

mod common;

use firmware_protocol::*;
use slackmeter::measure::{ClockConfig, EngineConfig, Feed, Window};

const TICK_1NS: (u64, u32) = (1_000_000_000, 1);

fn hello(tick: (u64, u32)) -> Vec<u8> {
    let chans = [
        Channel::edge(0, caps::TIMESTAMPS, "CLK"),
        Channel::line(1, roles::HEARTBEAT, "HB"),
        Channel {
            id: 2,
            kind: ChannelKind::Analog,
            info: 12,
            label: "VCC",
            scale_num_uv: 1000,
            scale_den: 1,
            offset_uv: 0,
        },
    ];
    common::hello_wire(&chans, tick.0, tick.1)
}

/// Frames for edges (ticks) starting with a rising edge, in batches of `per`.
fn edge_frames(ticks: &[u64], per: usize, seq0: u16) -> Vec<u8> {
    let mut out = Vec::new();
    let mut seq = seq0;
    let mut rising = true;
    for chunk in ticks.chunks(per) {
        let mut body = [0u8; MAX_BODY];
        let mut w = EdgeWriter::new(&mut body, 0, rising, 0, chunk[0]);
        for &t in &chunk[1..] {
            assert!(w.push(t));
        }
        let n = w.finish();
        let mut wire = [0u8; MAX_WIRE];
        let len = encode_frame(types::EDGES, seq, &body[..n], &mut wire).unwrap();
        out.extend_from_slice(&wire[..len]);
        seq = seq.wrapping_add(1);
        if chunk.len() % 2 == 1 {
            rising = !rising;
        }
    }
    out
}

fn engine_cfg(n_cycles: [u32; 2]) -> EngineConfig {
    EngineConfig {
        clock: ClockConfig {
            n_cycles,
            ..ClockConfig::default()
        },
        block_s: 1e6,
        window_s: 1e6,
        ..EngineConfig::default()
    }
}

#[test]
fn reference_hand_example_exactly_five_periods() {
    // REFERENCES.md §8 (computed hand example): rising edges 0, 1000, 2002, 2999, 4001, 5000 ns
    // → periods 1000 1002 997 1002 999: period jitter RMS 1.897 ns (÷N) / 2.121 ns (÷N−1),
    // pk-pk 5 ns, cycle-to-cycle max |·| 5 ns. Falling edges 500 ns after each rise; tick 1 ns.
    // (The engine holds the newest edge back one edge to recognise glitches, so the last fall
    // closes the last period.)
    let rises = [0u64, 1000, 2002, 2999, 4001, 5000];
    let mut ticks = Vec::new();
    for r in rises {
        ticks.push(r + 10);
        ticks.push(r + 510);
    }
    let mut f = Feed::new(engine_cfg([2, 3]));
    f.push(&hello(TICK_1NS));
    f.push(&edge_frames(&ticks, 4, 1));
    let s = f.engine.snapshot(Window::Session);
    let c = s.clock().unwrap();
    assert_eq!(c.cycles, 5);
    assert!(
        (c.period_jitter_rms_pop_ns.unwrap() - 1.897).abs() < 5e-4,
        "{:?}",
        c.period_jitter_rms_pop_ns
    );
    assert!(
        (c.period_jitter_rms_ns.unwrap() - 2.121).abs() < 5e-4,
        "{:?}",
        c.period_jitter_rms_ns
    );
    assert_eq!(c.period_jitter_pkpk_ns, Some(5.0));
    assert_eq!(c.cycle_to_cycle_max_ns, Some(5.0));
    assert_eq!(c.high_min_ns, Some(500.0));
    assert_eq!(c.low_min_ns, Some(497.0), "2999 − (2002 + 500)");
    // N-cycle error (JESD65B definition as quoted): (t(k+N) − t(k)) − N·T with T the mean period
    // 1000 ns: N = 2 → 2, −1, −1, 1 → RMS √(7/4), max 2
    let n2 = c.n_cycle.iter().find(|n| n.n == 2).unwrap();
    assert!(
        (n2.rms_ns - (7.0f64 / 4.0).sqrt()).abs() < 1e-9,
        "{}",
        n2.rms_ns
    );
    assert!((n2.max_abs_ns - 2.0).abs() < 1e-9);
    // TIE (IEEE Std 1139-2008: edge time minus an ideal clock), ideal clock by least squares
    let t: Vec<f64> = rises.iter().map(|r| *r as f64).collect();
    let n = t.len() as f64;
    let (sk, skk) = (15.0, 55.0);
    let st: f64 = t.iter().sum();
    let skt: f64 = t.iter().enumerate().map(|(k, v)| k as f64 * v).sum();
    let b = (n * skt - sk * st) / (n * skk - sk * sk);
    let a = (st - b * sk) / n;
    let rms = (t
        .iter()
        .enumerate()
        .map(|(k, v)| (v - a - b * k as f64).powi(2))
        .sum::<f64>()
        / n)
        .sqrt();
    assert!(
        (c.tie_rms_ns.unwrap() - rms).abs() < 1e-9,
        "{:?} vs {rms}",
        c.tie_rms_ns
    );
}

/// Stamps of a perfect clock of period `period_ns` seen with tick `q`, starting at `phase_ns`.
fn perfect(period_ns: f64, q: f64, phase_ns: f64, cycles: usize) -> Vec<u64> {
    let mut v = Vec::with_capacity(cycles * 2);
    for k in 0..cycles {
        let r = phase_ns + k as f64 * period_ns;
        v.push((r / q).floor() as u64);
        v.push(((r + period_ns * 0.5) / q).floor() as u64);
    }
    v
}

fn jitter_of(ticks: &[u64], tick: (u64, u32)) -> slackmeter::measure::ClockSnapshot {
    let mut f = Feed::new(engine_cfg([10, 100]));
    f.push(&hello(tick));
    f.push(&edge_frames(ticks, 400, 1));
    f.engine.snapshot(Window::Session).clocks[0].clone()
}

#[test]
fn quantisation_floor_at_random_phase_is_q_squared_over_six() {
    // Widrow, Kollár & Liu (IEEE Trans. Instrum. Meas. 45(2), 1996): at random phase each stamp
    // carries q²/12 and each period q²/6. A steady clock of period (n + p)·q shows p(1−p)·q²;
    // over a uniformly distributed fractional part p that averages to q²/6 (∫p(1−p)dp = 1/6).
    let q = 8.0;
    let m = 400;
    let mut var_sum = 0.0;
    for i in 0..m {
        let p = (i as f64 + 0.5) / m as f64;
        let ticks = perfect((150.0 + p) * q, q, 0.37 * q + i as f64 * 0.013, 4000);
        let c = jitter_of(&ticks, (125_000_000, 1));
        var_sum += c.period_jitter_rms_pop_ns.unwrap().powi(2);
        assert!(
            c.period_jitter_below_resolution,
            "a perfect clock is below resolution (p {p})"
        );
    }
    let got = (var_sum / m as f64).sqrt();
    let want = q / 6f64.sqrt();
    assert!((got / want - 1.0).abs() < 0.01, "{got} vs {want}");
}

#[test]
fn steady_commensurate_clock_gives_q_sqrt_p_one_minus_p() {
    // REFERENCES.md §8 (computed): a steady clock gives two period readings, σ = q·√(p(1−p)),
    // p = frac(T/q). T = 62.25 q: p = 0.25 → σ = q·√0.1875.
    let q = 8.0;
    for (p, phase) in [(0.25, 0.7), (0.5, 2.1), (0.125, 5.9)] {
        let period = (62.0 + p) * q;
        let ticks = perfect(period, q, phase, 40_000);
        let c = jitter_of(&ticks, (125_000_000, 1));
        let want = q * (p * (1.0 - p)).sqrt();
        let got = c.period_jitter_rms_pop_ns.unwrap();
        assert!((got - want).abs() / want < 1e-3, "p {p}: {got} vs {want}");
        // only two readings
        assert_eq!(c.period_max_ns.unwrap() - c.period_min_ns.unwrap(), q);
    }
}

#[test]
fn count_windows_give_frequency_and_sampled_duty_but_no_worst_cycle() {
    let mut f = Feed::new(EngineConfig::default());
    f.push(&hello((16_000_000, 1))); // 62.5 ns tick
    // 1 ms gates of a 1.234 MHz clock: 1234 edges each; 300 of 1000 samples high
    f.push(&common::count_windows_wire(
        10,
        methods::GATED,
        16_000,
        1234,
        (1000, 300),
    ));
    let c = f.engine.snapshot(Window::Session).clocks[0].clone();
    assert!(c.method.starts_with("count windows"));
    let fr = c.frequency_hz.unwrap();
    assert!((fr - 1.234e6).abs() < 1e-3, "{fr}");
    // gated counting: ±1 count per gate (Instrumentation Reference Book, 3rd ed.)
    assert!(c.frequency_uncertainty_hz.unwrap() > 0.0);
    let (p, lo, hi) = c.duty_sampled.unwrap();
    assert!((p - 0.3).abs() < 1e-12 && lo < 0.3 && hi > 0.3);
    assert!(c.high_min_ns.is_none());
    assert!(
        c.unavailable
            .iter()
            .any(|u| u.figure == "high_min_ns" && u.reason.contains("cannot observe"))
    );
}

/// Edge ticks of a 1 µs, 50 % clock (1 ns ticks) with one extra pulse from `rise_at` to `fall_at`
/// ticks after the rise of cycle `cycle`.
fn clock_with_pulse(cycle: u64, rise_at: u64, fall_at: u64) -> Vec<u64> {
    let mut ticks = Vec::new();
    for k in 0..100u64 {
        let r = 100 + k * 1000;
        ticks.push(r);
        ticks.push(r + 500);
        if k == cycle {
            ticks.push(r + rise_at);
            ticks.push(r + fall_at);
        }
    }
    ticks
}

#[test]
fn glitches_are_set_aside_and_counted() {
    // a 1 µs clock with a 20 ns high pulse inside one low phase
    let c = jitter_of(&clock_with_pulse(50, 700, 720), TICK_1NS);
    assert_eq!(c.glitches, 1);
    assert_eq!(c.high_min_ns, Some(500.0), "the glitch is not a cycle");
    assert_eq!(c.period_jitter_pkpk_ns, Some(0.0));
}

#[test]
fn a_glitch_close_to_an_edge_does_not_shorten_the_phase() {
    // a 1 µs clock; a 12 ns high pulse 40 ns after a falling edge (two short pulses in a row:
    // 40 ns low, then the 12 ns glitch); the shorter one is the glitch, the low phase stays 500 ns
    let c = jitter_of(&clock_with_pulse(30, 540, 552), TICK_1NS);
    assert_eq!(c.glitches, 1);
    assert_eq!(c.low_min_ns, Some(500.0));
    assert_eq!(c.high_min_ns, Some(500.0));
}

/// Edge ticks of a jitter-free clock (period `p` ticks, high `h` ticks) with one extra pulse in
/// cycle 60: inside the high phase (a low pulse) or the low phase, starting `at` ticks into
/// that phase, `w` ticks wide.
fn clock_with_runt(p: u64, h: u64, in_high: bool, at: u64, w: u64) -> Vec<u64> {
    let mut ticks = Vec::new();
    for k in 0..200u64 {
        let r = 1000 + k * p;
        ticks.push(r);
        if k == 60 && in_high {
            ticks.push(r + at);
            ticks.push(r + at + w);
        }
        ticks.push(r + h);
        if k == 60 && !in_high {
            ticks.push(r + h + at);
            ticks.push(r + h + at + w);
        }
    }
    ticks
}

#[test]
fn runts_are_set_aside_at_any_duty_width_and_place() {
    // The truth is the edge list without the extra pulse (a glitch is, by definition, not a
    // phase of the clock): the worst high and low times must be those of the clean clock, the
    // glitch counted once with its own width. Duty 0.1–0.9, the runt anywhere in a phase
    // (touching neither edge: one tick from the end is the hardest place, the fragment after it
    // a tick long), widths from one tick to 30 % of the phase (wider than the other phase at
    // duty 0.1 and 0.9); a slow clock
    // (1000 ticks) and a fast one (40 ticks) near the resolution.
    let mut failures = Vec::new();
    for p in [1000u64, 40] {
        for d10 in 1..=9u64 {
            let h = p * d10 / 10;
            for in_high in [true, false] {
                let len = if in_high { h } else { p - h };
                let widths = [1, len / 10, len * 3 / 10];
                for w in widths.into_iter().filter(|&w| w >= 1) {
                    for at in [1, len / 10, len / 4, len / 2, len * 3 / 4, len - w - 1] {
                        if at < 1 || at + w + 1 > len {
                            continue;
                        }
                        let ticks = clock_with_runt(p, h, in_high, at, w);
                        let c = jitter_of(&ticks, TICK_1NS);
                        let ok = c.glitches == 1
                            && c.high_min_ns == Some(h as f64)
                            && c.low_min_ns == Some((p - h) as f64)
                            && c.period_min_ns == Some(p as f64);
                        if !ok {
                            failures.push(format!(
                                "p {p} h {h} in_high {in_high} at {at} w {w}: {} glitches, \
                                 high {:?} low {:?} period {:?}",
                                c.glitches, c.high_min_ns, c.low_min_ns, c.period_min_ns
                            ));
                        }
                    }
                }
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}

/// Edge ticks of a jitter-free clock whose period and phases are not whole ticks (`p` and `h`
/// ticks, each edge stamped at the tick it falls in), with or without an extra pulse in
/// cycle 60 of the long phase (`at` and `w` ticks into it).
fn fractional_clock(p: f64, h: f64, runt: Option<(f64, f64)>) -> Vec<u64> {
    let long_is_high = h > p - h;
    let mut edges = Vec::new();
    for k in 0..200u64 {
        let r = 1000.0 + k as f64 * p;
        edges.push(r);
        let start = if long_is_high { r } else { r + h };
        if k == 60
            && let Some((at, w)) = runt
        {
            if long_is_high {
                edges.extend([start + at, start + at + w]);
                edges.push(r + h);
            } else {
                edges.push(r + h);
                edges.extend([start + at, start + at + w]);
            }
        } else {
            edges.push(r + h);
        }
    }
    edges.iter().map(|t| t.floor() as u64).collect()
}

#[test]
fn runts_as_wide_as_the_short_phase_are_set_aside_near_the_resolution() {
    // A clock of 9 to 13 ticks a period, the short phase 2 to 3.5 ticks and neither a whole
    // number of ticks (so real short phases read one tick apart and some look like runts):
    // a runt in the long phase from 40 % to 100 % of the short phase wide (past the
    // half-phase threshold), anywhere that leaves both fragments a tick or more. The truth is
    // the same clock stamped without the runt: its shortest high, low and period.
    let mut failures = Vec::new();
    for (p, short) in [(9.36f64, 2.31f64), (10.4, 2.6), (12.7, 3.4), (11.3, 2.2)] {
        for short_is_high in [true, false] {
            let h = if short_is_high { short } else { p - short };
            let len = p - short;
            let clean = jitter_of(&fractional_clock(p, h, None), TICK_1NS);
            for wf in [0.4, 0.6, 0.75, 0.9, 1.0] {
                let w = wf * short;
                let mut at = 1.0;
                while at + w + 1.0 <= len {
                    let ticks = fractional_clock(p, h, Some((at, w)));
                    if ticks.windows(2).any(|t| t[1] <= t[0]) {
                        // a runt under a tick stamped in one tick: no probe sees it
                        at += 0.37;
                        continue;
                    }
                    let c = jitter_of(&ticks, TICK_1NS);
                    let ok = c.glitches == 1
                        && c.high_min_ns == clean.high_min_ns
                        && c.low_min_ns == clean.low_min_ns
                        && c.period_min_ns == clean.period_min_ns;
                    if !ok {
                        failures.push(format!(
                            "p {p} h {h:.2} at {at:.2} w {w:.2}: {} glitches, high {:?} low \
                             {:?} period {:?} (clean {:?} {:?} {:?})",
                            c.glitches,
                            c.high_min_ns,
                            c.low_min_ns,
                            c.period_min_ns,
                            clean.high_min_ns,
                            clean.low_min_ns,
                            clean.period_min_ns
                        ));
                    }
                    at += 0.37;
                }
            }
        }
    }
    assert!(
        failures.is_empty(),
        "{} failures:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

#[test]
fn short_real_periods_at_duty_10_and_90_are_not_set_aside() {
    // Real cycles whose period falls short by more than half the shorter phase are held back
    // by the spacing rule (the hugging-runt case above) and must be kept: the truth is the edge
    // list itself (every pulse a phase), its shortest period, high and low.
    for d10 in [1u64, 9] {
        let mut ticks = Vec::new();
        let mut r = 1000u64;
        let (mut p_min, mut h_min, mut l_min) = (u64::MAX, u64::MAX, u64::MAX);
        for k in 0..3000u64 {
            // periods 920…1080 ticks (every 7th cycle 920–940: well under 1000 − 50 − 1)
            let p = if k % 7 == 3 {
                920 + k % 21
            } else {
                960 + (k * 7919) % 121
            };
            let h = p * d10 / 10;
            ticks.push(r);
            ticks.push(r + h);
            // the last cycle's period and low are not closed (no rise after them), and its
            // fall stays pending
            if k < 2999 {
                p_min = p_min.min(p);
                h_min = h_min.min(h);
                l_min = l_min.min(p - h);
            }
            r += p;
        }
        let c = jitter_of(&ticks, TICK_1NS);
        assert_eq!(c.glitches, 0, "duty {d10}0 %");
        assert_eq!(c.cycles, 2999, "duty {d10}0 %");
        assert_eq!(c.period_min_ns, Some(p_min as f64), "duty {d10}0 %");
        assert_eq!(c.high_min_ns, Some(h_min as f64), "duty {d10}0 %");
        assert_eq!(c.low_min_ns, Some(l_min as f64), "duty {d10}0 %");
    }
}

#[test]
fn a_stall_inside_the_first_period_leaves_the_figures() {
    // The truth is the edge list: a clean 36-tick clock (18 high, 18 low) whose first low
    // phase lasts ten periods more. The cycles judged with the seed that stalled period gave
    // leave the figures (counted as set aside); the longest period, the jitter and the worst
    // phases are the clean clock's, and every cycle is either in the figures or set aside.
    let mut ticks = vec![1000u64, 1018];
    let mut t = 1018 + 18 + 360;
    for _ in 0..20_000 {
        ticks.push(t);
        ticks.push(t + 18);
        t += 36;
    }
    let c = jitter_of(&ticks, TICK_1NS);
    assert!(c.cycles_set_aside > 0, "nothing set aside");
    assert_eq!(c.cycles + c.cycles_set_aside, 20_000, "every cycle once");
    assert_eq!(c.period_max_ns, Some(36.0));
    assert_eq!(c.period_min_ns, Some(36.0));
    assert_eq!((c.high_min_ns, c.low_min_ns), (Some(18.0), Some(18.0)));
    assert_eq!(c.glitches, 0);
}

#[test]
fn a_glitch_keeps_its_time_and_width() {
    // a 20 ns high pulse 700 ns into cycle 50 (rise at 50 100 ns): the glitch list says so
    let mut f = Feed::new(engine_cfg([10, 100]));
    f.push(&hello(TICK_1NS));
    f.push(&edge_frames(&clock_with_pulse(50, 700, 720), 400, 1));
    let s = f.engine.snapshot(Window::Session);
    let g = &s.glitch_events;
    assert_eq!(g.len(), 1);
    assert!((g[0].at_s - 50_800e-9).abs() < 1e-15, "{}", g[0].at_s);
    assert_eq!((g[0].high, g[0].width_ns), (true, 20.0));
}

#[test]
fn a_jittery_clock_near_the_resolution_keeps_its_phases() {
    // 4-tick phases moving by one tick: nothing is a glitch (short real phases stay phases)
    for (p, h) in [(8u64, 4u64), (6, 3), (10, 2)] {
        let ticks: Vec<u64> = (0..200u64)
            .flat_map(|k| {
                let r = 1000 + k * p + u64::from(k % 3 == 1);
                [r, r + h]
            })
            .collect();
        let c = jitter_of(&ticks, TICK_1NS);
        assert_eq!(c.glitches, 0, "p {p} h {h}");
        assert_eq!(c.cycles, 199, "p {p} h {h}");
    }
}

#[test]
fn allan_tau_is_the_sample_spacing_in_mean_periods() {
    // NIST SP 1065 §5.2: τ = m·τ0 with τ0 the spacing of the phase samples. A 1 µs clock whose
    // first period is stretched to 1.28 µs (a start-up cycle): samples every round(10 µs /
    // 1.28 µs) = 8 cycles lie 8 µs apart, not 8 × 1.28 µs
    let mut ticks = vec![1000u64, 1640];
    for k in 0..20_000u64 {
        let r = 2280 + k * 1000 + (k * 7919 % 13);
        ticks.push(r);
        ticks.push(r + 500);
    }
    let mut cfg = engine_cfg([10, 100]);
    cfg.clock.allan_tau0_s = 1e-5;
    let mut f = Feed::new(cfg);
    f.push(&hello(TICK_1NS));
    f.push(&edge_frames(&ticks, 400, 1));
    let c = f.engine.snapshot(Window::Session).clocks[0].clone();
    let first = c.allan.first().expect("an Allan point");
    assert!((first.tau_s - 8e-6).abs() < 8e-6 * 1e-3, "{}", first.tau_s);
}

#[test]
fn cycle_to_cycle_and_n_cycle_less_quantisation_recover_the_driven_jitter() {
    // Independent periods T + N(0, σ): adjacent differences have variance 2σ², N-cycle errors
    // Nσ² (JESD65B definitions as quoted in REFERENCES.md §8). Stamps quantised to q = 8 ns add
    // q²/12 each when the jitter dithers the quantiser (Widrow, Kollár & Liu 1996): three
    // stamps weighted 1, −2, 1 give q²/2, two give q²/6. σ = 10 ns, 200 000 cycles.
    let (q, sigma) = (8.0f64, 10.0f64);
    let mut x: u64 = 0x2545_F491_4F6C_DD1D;
    let mut uniform = || {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x >> 11) as f64 / (1u64 << 53) as f64
    };
    let mut t = 1000.0;
    let mut ticks = Vec::new();
    for _ in 0..200_000 {
        // Box–Muller
        let g = (-2.0 * uniform().max(1e-300).ln()).sqrt()
            * (2.0 * std::f64::consts::PI * uniform()).cos();
        let p = 1000.0 + sigma * g;
        ticks.push((t / q) as u64);
        ticks.push(((t + p / 2.0) / q) as u64);
        t += p;
    }
    let c = jitter_of(&ticks, (125_000_000, 1));
    let c2c = c.cycle_to_cycle_debiased_ns.unwrap();
    assert!(
        (c2c - sigma * 2f64.sqrt()).abs() < 0.02 * sigma * 2f64.sqrt(),
        "{c2c}"
    );
    let n10 = c.n_cycle.iter().find(|n| n.n == 10).unwrap();
    let want = sigma * 10f64.sqrt();
    assert!(
        (n10.debiased_ns - want).abs() < 0.05 * want,
        "{}",
        n10.debiased_ns
    );
}

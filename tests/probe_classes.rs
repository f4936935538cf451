//! Closed loop for each probe class: the virtual probe observes a known clock as a stamping,
//! a counting or an extremes probe; the engine's figures are checked against the bench's exact
//! truth — the same realisation at a 1 ps tick. Extremes: the worst high time, low time and
//! period of every cycle within ±1 tick, every cycle counted, every phase shorter than the
//! threshold counted, the frequency within its uncertainty, coverage 1.0; counting: frequency
//! and the sampled duty within their uncertainty. Plus lost windows, the margin's words and the
//! command line's errors for combinations no class has.

use std::process::Command;

use slackmeter::budget::{Design, Library};
use slackmeter::margin::{MarginConfig, ProblemKind, evaluate};
use slackmeter::measure::{EngineConfig, Feed, Snapshot, Window};
use slackmeter::sim::bench::{Bench, Slice};
use slackmeter::sim::{BenchModel, ProbeClass, RailModel, SimProbe};

fn model(class: ProbeClass, freq: f64, duty: f64, jitter: f64, tick: f64, seed: u64) -> BenchModel {
    let mut m = BenchModel::scenario("steady").unwrap();
    m.freq_hz = freq;
    m.duty = duty;
    m.jitter_rms_ns = jitter;
    m.tick_ns = tick;
    m.drift_ppm = 0.0;
    m.heartbeat_hz = 0.0;
    m.rails = vec![RailModel::quiet("VCC", 5000.0)];
    m.seed = seed;
    m.probe_class = class;
    m
}

/// The probe's bytes for `ms` ms of streaming from time 0, and the tick it used.
fn run(m: &BenchModel, ms: usize) -> (Vec<u8>, f64) {
    let mut probe = SimProbe::new(m.clone(), vec![]);
    probe.start();
    probe.run_until(ms as f64 * 1e6);
    probe.flush_all();
    let q = probe.model().tick_ns;
    (std::mem::take(probe.output()), q)
}

fn snapshot(bytes: &[u8]) -> Snapshot {
    let mut feed = Feed::new(EngineConfig::default());
    feed.push(bytes);
    feed.engine.snapshot(Window::Session)
}

/// Every cycle (high ns, low ns, period ns, closing rise ns) of the same realisation at a
/// 1 ps tick, for `ms` ms: a cycle is a rise, the fall after it and the next rise.
fn true_cycles(m: &BenchModel, ms: usize) -> Vec<(f64, f64, f64, f64)> {
    let mut fine = m.clone();
    fine.tick_ns = 0.001;
    let mut b = Bench::new(fine);
    let mut s = Slice::default();
    let mut edges: Vec<(f64, bool)> = Vec::new();
    for _ in 0..ms {
        b.advance(1e6, &mut s);
        let mut rising = s.clock_first_rising;
        for &t in &s.clock {
            edges.push((t as f64 * 0.001, rising));
            rising = !rising;
        }
    }
    let mut out = Vec::new();
    let (mut rise, mut fall): (Option<f64>, Option<f64>) = (None, None);
    for (t, rising) in edges {
        if rising {
            if let (Some(r), Some(f)) = (rise, fall)
                && r < f
            {
                out.push((f - r, t - f, t - r, t));
            }
            rise = Some(t);
        } else {
            fall = Some(t);
        }
    }
    out
}

fn min_of(v: impl Iterator<Item = f64>) -> f64 {
    v.fold(f64::INFINITY, f64::min)
}

/// The extremes class over a spread of clocks (frequency, duty, RC jitter, tick), some with
/// glitches and stalls: every cycle counted, the worst of every cycle within one tick of the
/// truth, the frequency within its stated uncertainty, every window received (coverage 1).
#[test]
fn extremes_class_gives_the_true_worst_of_every_cycle() {
    let cases: &[(f64, f64, f64, f64, f64, f64)] = &[
        // freq Hz, duty, jitter ns, tick ns, glitch Hz, stall Hz
        (2.0e6, 0.5, 0.05, 8.0, 0.0, 0.0),
        (1.0e6, 0.47, 1.5, 8.0, 0.0, 0.0),
        (8.0e6, 0.5, 0.3, 8.0, 0.0, 0.0),
        (4.0e6, 0.35, 2.0, 8.0, 200.0, 0.0),
        (250e3, 0.62, 20.0, 16.0, 0.0, 20.0),
        (3.3e6, 0.55, 1.0, 4.0, 500.0, 5.0),
    ];
    for (i, &(freq, duty, jitter, tick, glitch_hz, stall_hz)) in cases.iter().enumerate() {
        let mut m = model(
            ProbeClass::Extremes,
            freq,
            duty,
            jitter,
            tick,
            40 + i as u64,
        );
        m.glitch_rate_hz = glitch_hz;
        m.glitch_width_ns = 3.0 * tick;
        m.stall_rate_hz = stall_hz;
        m.stall_periods = 30.0;
        let ms = 300;
        let (bytes, q) = run(&m, ms);
        let snap = snapshot(&bytes);
        assert!(snap.trust.clean(), "{:?}", snap.trust);
        assert_eq!(snap.probe.as_ref().unwrap().probe_class, "extremes");
        let c = snap.clock().unwrap();
        assert_eq!(c.observation, "window-extremes", "case {i}");
        assert_eq!(c.coverage, Some(1.0), "case {i}: every window arrived");
        assert!(c.every_cycle_observed());
        // the cycles of the windows sent: those that closed before the last window's end
        let window_ticks = (10e6 / q).round();
        let last_end_ns = ((ms as f64 * 1e6 / q) / window_ticks).floor() * window_ticks * q;
        let truth: Vec<_> = true_cycles(&m, ms)
            .into_iter()
            .filter(|c| c.3 < last_end_ns - q)
            .collect();
        let near_end = true_cycles(&m, ms)
            .into_iter()
            .filter(|c| (c.3 - last_end_ns).abs() <= q)
            .count() as u64;
        assert!(
            c.cycles.abs_diff(truth.len() as u64) <= near_end,
            "case {i}: {} cycles counted, {} true",
            c.cycles,
            truth.len()
        );
        let checks = [
            (
                "high",
                c.high_min_ns.unwrap(),
                min_of(truth.iter().map(|t| t.0)),
            ),
            (
                "low",
                c.low_min_ns.unwrap(),
                min_of(truth.iter().map(|t| t.1)),
            ),
            (
                "period",
                c.period_min_ns.unwrap(),
                min_of(truth.iter().map(|t| t.2)),
            ),
        ];
        for (what, got, want) in checks {
            assert!(
                (got - want).abs() <= q + 1e-9,
                "case {i}: worst {what} {got} ns, true {want} ns (tick {q})"
            );
        }
        let longest = c.low_max_ns.unwrap();
        let true_longest = truth.iter().map(|t| t.1).fold(0.0, f64::max);
        assert!(
            (longest - true_longest).abs() <= q + 1e-9,
            "case {i}: longest low"
        );
        let f = c.frequency_hz.unwrap();
        let u = c.frequency_uncertainty_hz.unwrap();
        println!(
            "case {i}: {} cycles; worst high/low/period {:?} ns vs true {:?}; f {f:.1} ± {u:.1} Hz (driven {freq}); duty {:.4} ± {:.4}",
            c.cycles,
            checks.map(|c| c.1),
            checks.map(|c| c.2),
            c.duty.unwrap(),
            c.duty_uncertainty.unwrap()
        );
        if glitch_hz == 0.0 && stall_hz == 0.0 {
            assert!(
                (f - freq).abs() <= u,
                "case {i}: {f} Hz against {freq} Hz ± {u}"
            );
            let d = c.duty.unwrap();
            assert!(
                (d - duty).abs() <= c.duty_uncertainty.unwrap(),
                "case {i}: duty {d} against {duty}"
            );
        }
        // the mean over the cycles seen is the truth's mean (to a tick over the span)
        let true_mean = truth.iter().map(|t| t.2).sum::<f64>() / truth.len() as f64;
        let mean = c.period_mean_ns.unwrap();
        assert!(
            (mean - true_mean).abs() <= (2.0 * q + 2.0 * true_mean) / truth.len() as f64,
            "case {i}: mean period {mean} against {true_mean}"
        );
    }
}

/// Thresholds: every cycle whose phase is shorter is counted — the count lies between the true
/// counts at one tick below and one tick above the threshold (a phase is known to ±1 tick), and
/// the glitches the bench injected (pulses shorter than the threshold) are among them.
#[test]
fn extremes_class_counts_every_short_phase() {
    let q = 8.0;
    for (seed, glitch_hz) in [(7u64, 300.0), (8, 1000.0)] {
        let mut m = model(ProbeClass::Extremes, 2.0e6, 0.5, 0.5, q, seed);
        m.glitch_rate_hz = glitch_hz;
        m.glitch_width_ns = 20.0;
        // the thresholds in whole ticks (the probe takes them so)
        let thr_ns = 15.0 * q;
        m.high_threshold_ns = Some(thr_ns);
        m.low_threshold_ns = Some(thr_ns);
        let ms = 400;
        let (bytes, _) = run(&m, ms);
        let snap = snapshot(&bytes);
        let c = snap.clock().unwrap();
        let v = c.violations.as_ref().expect("threshold counts");
        assert_eq!(v.high_threshold_ns, Some(thr_ns));
        assert_eq!(v.windows, 40);
        let last_end_ns = 400e6;
        let truth: Vec<_> = true_cycles(&m, ms)
            .into_iter()
            .filter(|c| c.3 < last_end_ns)
            .collect();
        let count = |phase: usize, below: f64| {
            truth
                .iter()
                .filter(|t| if phase == 0 { t.0 } else { t.1 } < below)
                .count() as u64
        };
        for (phase, got) in [(0, v.high_short), (1, v.low_short)] {
            let (lo, hi) = (count(phase, thr_ns - q), count(phase, thr_ns + q));
            println!("seed {seed} phase {phase}: {got} short phases counted, truth {lo}..{hi}");
            assert!(
                (lo..=hi).contains(&got),
                "seed {seed} phase {phase}: {got} counted, truth {lo}..{hi}"
            );
        }
        // every injected glitch is a pulse of 20 ns: far below the threshold, so counted
        let glitch_pulses = count(0, 40.0) + count(1, 40.0);
        assert!(glitch_pulses > 20, "seed {seed}: {glitch_pulses} glitches");
        assert!(v.total() >= glitch_pulses, "seed {seed}");
        // the stamps are real short phases, within a tick of a true one
        for e in v.first.iter().take(50) {
            assert!(e.length_ns < thr_ns);
        }
        assert!(!v.first.is_empty());
    }
}

/// Counting (reciprocal windows and level samples, as the ATmega328P reference at MHz rates):
/// the frequency and the sampled duty within their stated uncertainty, no single cycle.
#[test]
fn counting_class_gives_frequency_and_sampled_duty() {
    for (i, &(freq, duty, jitter, tick)) in [
        (2.0e6, 0.5, 0.05, 62.5),
        (5.0e6, 0.4, 1.0, 62.5),
        (1.0e6, 0.3, 5.0, 8.0),
        (300e3, 0.7, 10.0, 62.5),
    ]
    .iter()
    .enumerate()
    {
        let m = model(
            ProbeClass::Counting,
            freq,
            duty,
            jitter,
            tick,
            60 + i as u64,
        );
        let (bytes, _) = run(&m, 1000);
        let snap = snapshot(&bytes);
        assert_eq!(snap.probe.as_ref().unwrap().probe_class, "counting");
        let c = snap.clock().unwrap();
        assert_eq!(c.observation, "count-windows");
        assert_eq!(c.count_windows, 10);
        assert_eq!(c.cycles, 0);
        let (f, u) = (c.frequency_hz.unwrap(), c.frequency_uncertainty_hz.unwrap());
        // the mean of jittered periods differs from the nominal by σ/√N too
        let n = freq;
        let u_jitter = 2.5 * jitter * 1e-9 * freq * freq / n.sqrt();
        assert!(
            (f - freq).abs() <= u + u_jitter,
            "case {i}: {f} Hz against {freq} ± {u}"
        );
        let (p, lo, hi) = c.duty_sampled.unwrap();
        assert!(
            lo <= duty && duty <= hi,
            "case {i}: duty {duty} outside {lo}..{hi} ({p})"
        );
        assert!(c.high_min_ns.is_none());
    }
}

/// Stamping stays what it was: every edge stamped, the class said in HELLO.
#[test]
fn stamping_class_is_the_default_and_says_so() {
    let m = model(ProbeClass::Stamping, 1.0e6, 0.5, 0.1, 8.0, 3);
    assert_eq!(
        BenchModel::scenario("steady").unwrap().probe_class,
        ProbeClass::Stamping
    );
    let (bytes, _) = run(&m, 50);
    let snap = snapshot(&bytes);
    assert_eq!(snap.probe.as_ref().unwrap().probe_class, "stamping");
    let c = snap.clock().unwrap();
    assert_eq!(c.observation, "continuous");
    assert!(c.violations.is_none());
}

/// Split a byte stream into its frames (each with its 0x00 delimiter).
fn frames(bytes: &[u8]) -> Vec<&[u8]> {
    bytes.split_inclusive(|&b| b == 0).collect()
}

/// A lost EXTREMES frame: the coverage says how much of the time the windows cover, the margin
/// lists the share, and "every cycle observed" is no longer said.
#[test]
fn a_lost_window_lowers_the_coverage() {
    let m = model(ProbeClass::Extremes, 2.0e6, 0.5, 0.1, 8.0, 11);
    let (bytes, _) = run(&m, 200);
    let mut kept = Vec::new();
    let (mut seen, mut dropped) = (0, 0);
    for f in frames(&bytes) {
        let mut scratch = [0u8; firmware_protocol::MAX_WIRE];
        let is_extremes = firmware_protocol::decode_frame(f, &mut scratch)
            .is_ok_and(|r| r.header.msg_type == firmware_protocol::types::EXTREMES);
        if is_extremes {
            seen += 1;
            // the 5th and 6th windows of 20 go missing
            if seen == 5 || seen == 6 {
                dropped += 1;
                continue;
            }
        }
        kept.extend_from_slice(f);
    }
    assert_eq!(dropped, 2);
    let snap = snapshot(&kept);
    let c = snap.clock().unwrap();
    let cov = c.coverage.unwrap();
    assert!((0.85..1.0).contains(&cov), "{cov}");
    assert!(!c.every_cycle_observed());
    assert_eq!(snap.completeness(), "lost");
    assert!(c.worst_label().contains("worst of the observed cycles"));
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let cfg = MarginConfig {
        guard_band: 0.2,
        temp_c: Some(25.0),
        vcc_v: None,
    };
    let margin = evaluate(&snap, &d, &lib, &cfg).unwrap();
    assert!(
        margin
            .problems
            .iter()
            .any(|p| p.kind == ProblemKind::SampledCoverage),
        "{:?}",
        margin.problems
    );
    assert!(
        !margin
            .notes
            .iter()
            .any(|n| n.contains("every cycle observed"))
    );
}

/// With every window received the margin says every cycle was observed and holds the true
/// worst cycle against the budget; threshold counts are a problem of their own.
#[test]
fn the_margin_says_every_cycle_was_observed() {
    let mut m = model(ProbeClass::Extremes, 2.0e6, 0.5, 0.2, 8.0, 21);
    m.glitch_rate_hz = 100.0;
    m.glitch_width_ns = 24.0;
    m.high_threshold_ns = Some(160.0);
    m.low_threshold_ns = Some(160.0);
    let ms = 300;
    let (bytes, q) = run(&m, ms);
    let snap = snapshot(&bytes);
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let cfg = MarginConfig {
        guard_band: 0.2,
        temp_c: Some(25.0),
        vcc_v: None,
    };
    let margin = evaluate(&snap, &d, &lib, &cfg).unwrap();
    assert!(
        margin
            .notes
            .iter()
            .any(|n| n.contains("every cycle observed")),
        "{:?}",
        margin.notes
    );
    let truth = true_cycles(&m, ms);
    let true_low = min_of(truth.iter().map(|t| t.1));
    let measured_low = margin.worst_case.phases[0].measured_ns;
    assert!(
        (measured_low - true_low).abs() <= q + 1e-9,
        "{measured_low} vs {true_low}"
    );
    let v = margin
        .problems
        .iter()
        .find(|p| p.kind == ProblemKind::ThresholdViolations)
        .expect("threshold violations listed");
    assert!(v.count > 0 && v.detail.contains("shorter than its threshold"));
    assert!(margin.verdict_text.contains("shorter than its threshold"));
    assert!(
        !margin
            .problems
            .iter()
            .any(|p| p.kind == ProblemKind::SampledCoverage)
    );
}

fn slackmeter(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(args)
        .env("COLUMNS", "1000")
        .output()
        .unwrap()
}

/// `report --json` says the class the probe stated and how each clock was observed.
#[test]
fn report_json_names_the_class_it_saw() {
    let dir = std::env::temp_dir().join(format!("slackmeter-classes-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    for (class, observation) in [
        ("stamping", "continuous"),
        ("counting", "count-windows"),
        ("extremes", "window-extremes"),
    ] {
        let file = dir.join(format!("{class}.smrec"));
        let f = file.to_str().unwrap();
        let mut args = vec![
            "record",
            "--sim",
            "--fast",
            "--probe-class",
            class,
            "--duration",
            "1s",
            "-o",
            f,
            "--force",
        ];
        if class == "extremes" {
            args.extend(["--glitch-rate", "100Hz", "--high-threshold", "120ns"]);
        }
        let out = slackmeter(&args);
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let out = slackmeter(&["report", f, "--json"]);
        // 3: the margin is broken (the glitches' short phases), which is a report all the same
        assert!(
            matches!(out.status.code(), Some(0 | 3)),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
        assert_eq!(v["probe_class"], class);
        assert_eq!(v["clocks"][0]["observation"], observation);
        if class == "extremes" {
            assert_eq!(v["clocks"][0]["coverage"], 1.0);
            assert_eq!(v["clocks"][0]["violations"]["high_threshold_ns"], 120.0);
            assert!(v["clocks"][0]["violations"]["high_short"].as_u64().unwrap() > 0);
            let text = slackmeter(&["report", f]);
            let text = String::from_utf8_lossy(&text.stdout);
            assert!(text.contains("short phases"), "{text}");
            assert!(text.contains("below 120.0 ns"), "{text}");
            assert!(text.contains("complete: every cycle observed"), "{text}");
        }
    }
    let _ = std::fs::remove_dir_all(&dir);
}

/// Combinations no class has are refused in words that name the flag and the way out.
#[test]
fn bad_class_combinations_are_refused_in_words() {
    for (args, want) in [
        (
            &["--probe-class", "counting", "--bursts", "4000/100ms"][..],
            "--bursts stamps edges in bursts",
        ),
        (&["--window", "10ms"][..], "add --probe-class counting"),
        (
            &["--probe-class", "counting", "--high-threshold", "100ns"][..],
            "add --probe-class extremes",
        ),
        (
            &["--probe-class", "extremes", "--low-threshold", "1ns"][..],
            "between one tick",
        ),
        (
            &["--probe-class", "extremes", "--window", "20s"][..],
            "--window must lie between 1 ms and 10 s",
        ),
        (
            &["--probe-class", "sampling"][..],
            "the classes are stamping, counting, extremes",
        ),
    ] {
        let mut a = vec!["sim", "--stdout", "--duration", "10ms"];
        a.extend_from_slice(args);
        let out = slackmeter(&a);
        assert!(!out.status.success(), "{args:?} was accepted");
        let err = String::from_utf8_lossy(&out.stderr);
        assert!(err.contains(want), "{args:?}: {err}");
    }
}

/// End to end over a pseudo-terminal: the host sets an extremes probe's thresholds with
/// `--set` (CONFIGURE, in ticks), and the recording's report shows them in force and counted.
#[test]
fn the_host_sets_the_thresholds_over_the_link() {
    let dir = std::env::temp_dir().join(format!("slackmeter-classes-pty-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let link = dir.join("probe");
    let mut sim = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args([
            "sim",
            "--pty",
            "--probe-class",
            "extremes",
            "--glitch-rate",
            "100Hz",
        ])
        .args(["--duration", "20s", "--link"])
        .arg(&link)
        .stdout(std::process::Stdio::null())
        .stderr(std::process::Stdio::null())
        .spawn()
        .unwrap();
    let t0 = std::time::Instant::now();
    while std::fs::read_link(&link).is_err() {
        assert!(
            t0.elapsed().as_secs() < 10,
            "the virtual probe did not start"
        );
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let rec = dir.join("pty.smrec");
    let out = slackmeter(&[
        "record",
        link.to_str().unwrap(),
        "--set",
        "CLK:high-threshold=13",
        "--set",
        "CLK:low-threshold=13",
        "--duration",
        "2s",
        "-o",
        rec.to_str().unwrap(),
    ]);
    let _ = sim.kill();
    let _ = sim.wait();
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = slackmeter(&["report", rec.to_str().unwrap(), "--json"]);
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let c = &v["clocks"][0];
    assert_eq!(v["probe_class"], "extremes");
    assert_eq!(c["observation"], "window-extremes");
    // 13 ticks of 8 ns
    assert_eq!(c["violations"]["high_threshold_ns"], 104.0);
    assert_eq!(c["violations"]["low_threshold_ns"], 104.0);
    assert!(
        c["violations"]["high_short"].as_u64().unwrap()
            + c["violations"]["low_short"].as_u64().unwrap()
            > 0
    );
    let _ = std::fs::remove_dir_all(&dir);
}

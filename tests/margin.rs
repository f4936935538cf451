//! The margin verdict: hand-computed slack, the direction and size of derating, and the
//! measured failure onset against the virtual probe's true failure point.

mod common;

use firmware_protocol::*;
use slackmeter::budget::{Design, Library, OperatingPoint, solve};
use slackmeter::cli::model::typical_fault_limit;
use slackmeter::diag::Source;
use slackmeter::margin::{MarginConfig, Verdict, evaluate};
use slackmeter::measure::{EngineConfig, Feed, Window};
use slackmeter::sim::bench::{Bench, Slice};
use slackmeter::sim::{BenchModel, RailModel, SimProbe};

/// The worked example of DESIGN.md §4 as a design: L = 500 ns, H = 125 ns, P = 0.
const EXAMPLE: &str = include_str!("designs/worked-example.toml");

fn snapshot_of(period: u64, high: u64, cycles: u64) -> slackmeter::measure::Snapshot {
    snapshot_at_tick(1_000_000_000, period, high, cycles)
}

/// A clean clock of `period` and `high` ticks, `cycles` long, from a probe of `tick_hz`.
fn snapshot_at_tick(
    tick_hz: u64,
    period: u64,
    high: u64,
    cycles: u64,
) -> slackmeter::measure::Snapshot {
    snapshot_with_glitch(tick_hz, period, high, cycles, None)
}

/// The same clock, with a runt of `width` ticks in the low phase of cycle `at` when given.
fn snapshot_with_glitch(
    tick_hz: u64,
    period: u64,
    high: u64,
    cycles: u64,
    glitch: Option<(u64, u64)>,
) -> slackmeter::measure::Snapshot {
    let chans = [Channel::edge(0, caps::TIMESTAMPS, "CLK")];
    let mut wire = [0u8; MAX_WIRE];
    let mut bytes = common::hello_wire(&chans, tick_hz, 1);
    let mut body = [0u8; MAX_BODY];
    let mut w = EdgeWriter::new(&mut body, 0, true, 0, 100);
    for k in 0..cycles {
        let r = 100 + k * period;
        if k > 0 {
            assert!(w.push(r));
        }
        assert!(w.push(r + high));
        if let Some((_, width)) = glitch.filter(|g| g.0 == k) {
            // a short high pulse in the middle of the low phase
            let mid = r + high + (period - high) / 2;
            assert!(w.push(mid));
            assert!(w.push(mid + width));
        }
    }
    assert!(w.push(100 + cycles * period));
    let nb = w.finish();
    let n = encode_frame(types::EDGES, 1, &body[..nb], &mut wire).unwrap();
    bytes.extend_from_slice(&wire[..n]);
    let mut f = Feed::new(EngineConfig::default());
    f.push(&bytes);
    f.engine.snapshot(Window::Session)
}

#[test]
fn hand_computed_slack() {
    let lib = Library::builtin();
    let d = Design::parse(Source::new("example.toml", EXAMPLE.to_string()), &lib).unwrap();
    let at_5v = |s| {
        let cfg = MarginConfig {
            vcc_v: Some(5.0),
            ..MarginConfig::default()
        };
        evaluate(&s, &d, &lib, &cfg).unwrap()
    };
    // a 1 MHz clock at 30 % duty: high 300 ns, low 700 ns (tick 1 ns, no jitter)
    let m = at_5v(snapshot_of(1000, 300, 200));
    // worst case: low 700 − 500 = +200 ns (+40 %), high 300 − 125 = +175 ns (+140 %), period 1000 − 0
    assert!((m.low_slack_ns - 200.0).abs() < 1e-9, "{}", m.low_slack_ns);
    assert!((m.high_slack_ns - 175.0).abs() < 1e-9);
    assert!((m.period_slack_ns - 1000.0).abs() < 1e-9);
    assert!((m.worst_case.phases[0].slack_pct.unwrap() - 40.0).abs() < 1e-9);
    assert_eq!(m.verdict, Verdict::InsideWorstCase);
    assert!(m.guard_band_met, "40 % ≥ 20 %");
    assert!(
        !m.mean_phases,
        "a timestamping probe gives the worst cycles"
    );
    // typical: low 700 − 400 = +300, high 300 − 100 = +200
    assert!((m.typical.phases[0].slack_ns - 300.0).abs() < 1e-9);
    assert!((m.typical.phases[1].slack_ns - 200.0).abs() < 1e-9);
    // a 1.6 MHz clock at 30 %: low 437 ns (< 500 worst case, > 400 typical), high 187 ns
    let m = at_5v(snapshot_of(625, 187, 200));
    assert_eq!(m.verdict, Verdict::BeyondWorstCaseInsideTypical);
    assert!(
        (m.low_slack_ns - (438.0 - 500.0)).abs() < 1e-9,
        "{}",
        m.low_slack_ns
    );
    assert!(
        m.verdict_text
            .starts_with("Beyond the worst-case budget, inside the typical one")
    );
    // 2.5 MHz at 30 %: low 280 ns, beyond both
    let m = at_5v(snapshot_of(400, 120, 200));
    assert_eq!(m.verdict, Verdict::BeyondTypical);
    assert!(m.verdict_text.starts_with("No margin left"));
}

/// The ±tick rule on edge lists at an 8 ns tick (125 MHz timebase), against the worked example
/// of DESIGN.md §4 at 5 V (worst case H = 125 ns, typical H = 100 ns, L = 500 ns): a slack is
/// known to be positive only beyond +8 ns, negative only beyond −8 ns. A 1 ns tick would call
/// every one of these by its measured sign.
#[test]
fn the_tick_bounds_the_sign_of_a_slack_at_both_signs() {
    use slackmeter::margin::Sign;
    let lib = Library::builtin();
    let d = Design::parse(Source::new("example.toml", EXAMPLE.to_string()), &lib).unwrap();
    let cfg = MarginConfig {
        vcc_v: Some(5.0),
        ..MarginConfig::default()
    };
    // 100 ticks = 800 ns period; the low time (800 − high) clears 500 ns by far in every case
    for (high_ticks, slack_ns, sign, verdict) in [
        // 17 × 8 = 136 ns: +11 ns, beyond the bound
        (17, 11.0, Sign::Clears, Verdict::InsideWorstCase),
        // 16 × 8 = 128 ns: +3 ns, positive as measured but inside ± 8 ns
        (16, 3.0, Sign::WithinResolution, Verdict::WithinResolution),
        // 15 × 8 = 120 ns: −5 ns, negative as measured but inside ± 8 ns
        (15, -5.0, Sign::WithinResolution, Verdict::WithinResolution),
        // 14 × 8 = 112 ns: −13 ns, short beyond doubt; +12 ns against the typical 100 ns
        (
            14,
            -13.0,
            Sign::Short,
            Verdict::BeyondWorstCaseInsideTypical,
        ),
        // 12 × 8 = 96 ns: −29 ns; −4 ns against the typical budget is not known to be inside it
        (12, -29.0, Sign::Short, Verdict::BeyondTypical),
    ] {
        let s = snapshot_at_tick(125_000_000, 100, high_ticks, 200);
        let m = evaluate(&s, &d, &lib, &cfg).unwrap();
        let h = &m.worst_case.phases[1];
        assert_eq!(h.phase, "high");
        assert!((h.slack_ns - slack_ns).abs() < 1e-9, "{}", h.slack_ns);
        assert!((h.uncertainty_ns - 8.0).abs() < 1e-12, "± one tick");
        assert_eq!(h.sign, sign, "high {high_ticks} ticks");
        assert_eq!(m.verdict, verdict, "high {high_ticks} ticks");
        assert_eq!(m.worst_case.phases[0].sign, Sign::Clears);
        assert!(m.problems.iter().all(|p| !p.kind.is_failure()));
        // the exit rule: within resolution breaks the margin only when strict
        let breaks = verdict.breaks_margin(false);
        assert_eq!(
            breaks,
            !matches!(
                verdict,
                Verdict::InsideWorstCase | Verdict::WithinResolution
            )
        );
    }
}

#[test]
fn a_lower_rail_costs_exactly_what_the_derating_predicts() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let s = snapshot_of(500, 250, 200); // 2 MHz, 50 %
    let at = |v: f64| {
        evaluate(
            &s,
            &d,
            &lib,
            &MarginConfig {
                vcc_v: Some(v),
                ..MarginConfig::default()
            },
        )
        .unwrap()
    };
    let budget = |v: f64| {
        let mut op = OperatingPoint::of(&d);
        op.vcc_v = v;
        solve(&d, &lib, &op, None, None)
    };
    // between the 4.5 V and 6.0 V columns the guaranteed value is the 4.5 V column: 4.6 V costs
    // nothing against 5.0 V; below 4.5 V the next lower column applies and the rail costs slack
    for (v_hi, v_lo, costs) in [(5.0, 4.6, false), (5.0, 4.4, true), (4.6, 4.4, true)] {
        let (hi, lo) = (at(v_hi), at(v_lo));
        let (b_hi, b_lo) = (budget(v_hi), budget(v_lo));
        if costs {
            assert!(lo.low_slack_ns < hi.low_slack_ns, "{v_lo} V vs {v_hi} V");
        } else {
            assert!(
                (lo.low_slack_ns - hi.low_slack_ns).abs() < 1e-9,
                "{v_lo} V vs {v_hi} V"
            );
        }
        let predicted = b_lo.low_required_ns - b_hi.low_required_ns;
        assert!(
            ((hi.low_slack_ns - lo.low_slack_ns) - predicted).abs() < 1e-9,
            "{} vs {predicted}",
            hi.low_slack_ns - lo.low_slack_ns
        );
        assert!(
            ((hi.high_slack_ns - lo.high_slack_ns)
                - (b_lo.high_required_ns - b_hi.high_required_ns))
                .abs()
                < 1e-9
        );
    }
}

#[test]
fn measured_failure_onset_matches_the_true_limit() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    // the sim's fault rule: the typical budget at the design's own temperature
    let limit = typical_fault_limit(&d, &lib, OperatingPoint::of(&d).temp_c);
    let mut found = 0;
    for (i, v) in [4.5, 4.6, 4.7, 4.8, 4.9, 5.0, 5.1, 5.2, 5.3, 5.4]
        .into_iter()
        .enumerate()
    {
        let mut m = BenchModel::scenario("sweep").unwrap();
        m.rails = vec![RailModel {
            noise_mv: 2.0,
            ..RailModel::quiet("VCC_FAR", v * 1000.0)
        }];
        m.sweep = Some(slackmeter::sim::Sweep {
            from_hz: 1.5e6,
            to_hz: 3.0e6,
            over_s: 1.5,
        });
        m.freq_hz = 1.5e6;
        m.fault = Some(limit.clone());
        m.seed = 100 + i as u64;
        m.burst_edges = Some(1000);
        m.burst_every_s = 0.01;
        m.analog_rate_hz = 1000.0;
        // the truth: the bench itself, slice by slice, until the fault rises
        let mut b = Bench::new(m.clone());
        let mut s = Slice::default();
        let mut true_hz = None;
        for _ in 0..1500 {
            let start_s = b.now_ns() * 1e-9;
            b.advance(1e6, &mut s);
            if !s.fault.is_empty() {
                true_hz = Some(1e9 / m.period_at_ns(start_s));
                break;
            }
        }
        let true_hz = true_hz.expect("the sweep reaches the limit");
        // the measurement: the same model through the probe protocol and the engine
        let mut p = SimProbe::new(m, vec![]);
        p.start();
        p.run_until(1.5e9);
        p.flush_all();
        let mut f = Feed::new(EngineConfig::default());
        f.push(&std::mem::take(p.output()));
        let snap = f.engine.snapshot(Window::Session);
        let onset = snap
            .fault_onsets
            .first()
            .expect("the engine saw the fault")
            .clone();
        let err = onset.frequency_hz - true_hz;
        println!(
            "rail {v:.1} V: true limit {:.4} MHz, onset {:.4} ± {:.4} MHz (error {:+.4})",
            true_hz / 1e6,
            onset.frequency_hz / 1e6,
            onset.frequency_uncertainty_hz / 1e6,
            err / 1e6
        );
        assert!(
            err.abs() <= onset.frequency_uncertainty_hz,
            "at {v} V: error {err} Hz > {} Hz",
            onset.frequency_uncertainty_hz
        );
        assert!((onset.rail.as_ref().unwrap().1 - v * 1000.0).abs() < 20.0);
        found += 1;
    }
    assert_eq!(found, 10);
}

#[test]
fn a_design_whose_rails_the_recording_lacks_is_reported() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    // a recording whose only rail is called VCC (the demo design names VCC_NEAR/MID/FAR)
    let mut m = BenchModel::scenario("steady").unwrap();
    m.rails = vec![RailModel::quiet("VCC", 4950.0)];
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(20e6);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    let snap = f.engine.snapshot(Window::Session);
    let mg = evaluate(&snap, &d, &lib, &MarginConfig::default()).unwrap();
    assert!(
        mg.notes
            .iter()
            .any(|n| n.contains("names rail VCC_FAR") && n.contains("rails: VCC")),
        "{:?}",
        mg.notes
    );
    assert!(
        (mg.vcc_used_v - 4.95).abs() < 0.01,
        "the lowest rail stands in"
    );
}

/// A counting probe (frequency from count windows, duty from level samples, as the reference
/// firmware sends by default): the verdict uses the mean phases, says so, and carries the
/// sampled duty's uncertainty.
#[test]
fn a_counting_probe_gets_a_verdict_on_mean_phases() {
    let lib = Library::builtin();
    let d = Design::parse(Source::new("example.toml", EXAMPLE.to_string()), &lib).unwrap();
    let chans = [Channel::edge(
        0,
        caps::COUNT_WINDOWS | caps::LEVEL_SAMPLING,
        "CLK",
    )];
    let mut bytes = common::hello_wire(&chans, 16_000_000, 1);
    // 1 MHz over ten reciprocal windows of 0.1 s; 30 000 of 100 000 samples high: duty 0.30
    bytes.extend(common::count_windows_wire(
        10,
        methods::RECIPROCAL,
        1_600_000,
        100_000,
        (10_000, 3_000),
    ));
    let mut f = Feed::new(EngineConfig::default());
    f.push(&bytes);
    let s = f.engine.snapshot(Window::Session);
    let cfg = MarginConfig {
        vcc_v: Some(5.0),
        ..MarginConfig::default()
    };
    let m = evaluate(&s, &d, &lib, &cfg).expect("a verdict from count windows");
    // mean low 700 ns − 500 = +200 ns, mean high 300 − 125 = +175 ns (DESIGN.md §4 example)
    assert!((m.clock_hz - 1e6).abs() < 1e-3, "{}", m.clock_hz);
    assert!((m.low_slack_ns - 200.0).abs() < 1e-6, "{}", m.low_slack_ns);
    assert!(
        (m.high_slack_ns - 175.0).abs() < 1e-6,
        "{}",
        m.high_slack_ns
    );
    assert_eq!(m.verdict, Verdict::InsideWorstCase);
    assert!(m.notes.iter().any(|n| n.contains("MEAN")), "{:?}", m.notes);
    assert!(m.mean_phases);
    // Wilson half-width at p = 0.3, n = 100 000 is about 0.0028: about 2.8 ns on a 1 µs period
    let u = m.worst_case.phases[0].uncertainty_ns;
    assert!(u > 2.0 && u < 4.0, "{u}");
}

/// A swept clock that fails, judged interval by interval: the interval judged (the last clean
/// one before the failure) and the highest clean interval each measure the frequency the
/// virtual probe really ran at their time, within that interval's own uncertainty. The truth
/// is the bench model's nominal frequency at the middle of the interval's observed cycles
/// (the sweep is linear in frequency, so the mean period of a short stretch is that of its
/// middle to far below the uncertainty).
#[test]
fn a_sweep_is_judged_at_the_frequency_it_really_ran() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let mut m = BenchModel::scenario("sweep").unwrap();
    m.sweep = Some(slackmeter::sim::Sweep {
        from_hz: 1.5e6,
        to_hz: 2.5e6,
        over_s: 4.0,
    });
    m.freq_hz = 1.5e6;
    m.fault = Some(typical_fault_limit(&d, &lib, OperatingPoint::of(&d).temp_c));
    m.burst_edges = Some(2000);
    m.burst_every_s = 0.02;
    m.analog_rate_hz = 1000.0;
    m.seed = 17;
    let truth = m.clone();
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(4.0e9);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    let snap = f.engine.snapshot(Window::Session);
    let mg = evaluate(&snap, &d, &lib, &MarginConfig::default()).unwrap();
    assert_eq!(mg.verdict, Verdict::Failed, "{}", mg.verdict_text);
    assert!(mg.moving);
    assert_eq!(
        mg.judged.basis,
        slackmeter::margin::Basis::LastCleanBeforeFailure
    );
    let interval = |from_s: f64| {
        mg.intervals
            .iter()
            .find(|i| i.from_s == from_s)
            .expect("the interval is listed")
    };
    let true_hz = |at_s: f64| 1e9 / truth.period_at_ns(at_s);
    // the operating point
    let op = interval(mg.judged.from_s);
    let err = mg.operating_hz - true_hz(op.at_s);
    println!(
        "operating {:.1} Hz, truth {:.1} Hz, error {err:+.1} Hz, uncertainty {:.1} Hz",
        mg.operating_hz,
        true_hz(op.at_s),
        op.frequency_uncertainty_hz
    );
    assert!(err.abs() <= op.frequency_uncertainty_hz, "{err} Hz");
    assert_eq!(
        mg.operating_uncertainty_hz,
        Some(op.frequency_uncertainty_hz)
    );
    // the highest clean interval
    let at = mg.highest_clean_at_s.expect("an interval ran clean");
    let hc = mg
        .intervals
        .iter()
        .find(|i| i.at_s == at)
        .expect("the highest clean interval is listed");
    let clean = mg.highest_clean_hz.unwrap();
    let err = clean - true_hz(at);
    println!(
        "highest clean {clean:.1} Hz, truth {:.1} Hz, error {err:+.1} Hz, uncertainty {:.1} Hz",
        true_hz(at),
        hc.frequency_uncertainty_hz
    );
    assert!(err.abs() <= hc.frequency_uncertainty_hz, "{err} Hz");
    // and both lie before the failure, below its onset
    let onset = mg.fail_onset_hz.unwrap();
    assert!(clean <= mg.operating_hz && mg.operating_hz < onset);
}

/// A glitch on the clock is a failure whatever the slack says: a double-clocked register
/// breaks a discrete-logic machine by itself. The same clock without it is inside the budget.
#[test]
fn a_glitch_fails_the_verdict() {
    use slackmeter::margin::ProblemKind;
    let lib = Library::builtin();
    let d = Design::parse(Source::new("example.toml", EXAMPLE.to_string()), &lib).unwrap();
    let cfg = MarginConfig {
        vcc_v: Some(5.0),
        ..MarginConfig::default()
    };
    // 1 MHz at 30 % (1 ns tick), inside the worst-case budget (DESIGN.md §4 example)
    let clean = evaluate(&snapshot_of(1000, 300, 200), &d, &lib, &cfg).unwrap();
    assert_eq!(clean.verdict, Verdict::InsideWorstCase);
    // a 5 ns runt in the 700 ns low phase of cycle 100
    let s = snapshot_with_glitch(1_000_000_000, 1000, 300, 200, Some((100, 5)));
    assert_eq!(s.clock().unwrap().glitches, 1);
    let m = evaluate(&s, &d, &lib, &cfg).unwrap();
    assert_eq!(m.verdict, Verdict::Failed, "{}", m.verdict_text);
    assert_eq!(
        m.slack_verdict,
        Verdict::InsideWorstCase,
        "the runt set aside"
    );
    let g = m
        .problems
        .iter()
        .find(|p| p.kind == ProblemKind::Glitches)
        .expect("the glitch is listed");
    assert_eq!(g.count, 1);
    assert!(g.kind.is_failure());
    assert!(
        m.verdict_text.starts_with("FAILED: 1 glitch on the clock"),
        "{}",
        m.verdict_text
    );
    assert!(Verdict::Failed.breaks_margin(false));
}

/// A rail below its rated minimum is a problem named beside the verdict (with its time below),
/// not a failure by itself: the slack, derated at that rail, decides.
#[test]
fn undervoltage_is_named_with_its_time_below() {
    use slackmeter::margin::ProblemKind;
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let mut m = BenchModel::scenario("sagging").unwrap();
    m.glitch_rate_hz = 0.0;
    m.burst_edges = Some(2000);
    m.burst_every_s = 0.02;
    m.analog_rate_hz = 1000.0;
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(3.0e9);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    let snap = f.engine.snapshot(Window::Session);
    let far = snap.rail("VCC_FAR").unwrap();
    assert!(far.below_limit_s > 0.0, "the far rail sags below 4.5 V");
    let mg = evaluate(&snap, &d, &lib, &MarginConfig::default()).unwrap();
    assert_ne!(mg.verdict, Verdict::Failed, "{}", mg.verdict_text);
    assert_eq!(mg.verdict, mg.slack_verdict);
    let below: Vec<_> = mg
        .problems
        .iter()
        .filter(|p| p.kind == ProblemKind::RailBelowMinimum)
        .collect();
    assert_eq!(below.len(), 1, "only VCC_FAR: {:?}", mg.problems);
    assert!(!below[0].kind.is_failure());
    assert!(
        below[0]
            .detail
            .starts_with("VCC_FAR was below its rated minimum 4.50 V")
    );
    assert!(
        below[0]
            .detail
            .contains(&format!("for {:.3} s", far.below_limit_s)),
        "{}",
        below[0].detail
    );
    assert!(
        mg.verdict_text
            .contains("VCC_FAR was below its rated minimum")
    );
    // the budget was derated at the sagging rail's minimum
    assert!((mg.section_vcc_v["far"] - far.min_mv.unwrap() / 1000.0).abs() < 1e-9);
}

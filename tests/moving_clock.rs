//! A session whose clock moves: the movement is found from the interval frequencies, and the
//! jitter against the moving mean is the clock's own, not its sweep. The truth is the virtual
//! probe's model: independent successive periods of the stated RMS jitter.

use slackmeter::measure::{EngineConfig, Feed, Snapshot, Window};
use slackmeter::sim::{BenchModel, SimProbe, Sweep};

fn session(m: BenchModel, seconds: f64) -> Snapshot {
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(seconds * 1e9);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    f.engine.snapshot(Window::Session)
}

fn swept(jitter_ns: f64, seed: u64) -> BenchModel {
    let mut m = BenchModel::scenario("sweep").unwrap();
    m.sweep = Some(Sweep {
        from_hz: 1.0e6,
        to_hz: 3.0e6,
        over_s: 3.0,
    });
    m.freq_hz = 1.0e6;
    m.jitter_rms_ns = jitter_ns;
    m.burst_edges = Some(2000);
    m.burst_every_s = 0.02;
    m.analog_rate_hz = 1000.0;
    m.seed = seed;
    m
}

/// The detrended period jitter of a swept RC clock lies within 15 % of the model's jitter, at
/// jitters below and above the 8 ns tick's floor; the whole-window figure is the sweep.
#[test]
fn a_swept_clock_shows_its_own_jitter() {
    for (jitter_ns, seed) in [(1.5, 1), (3.0, 2), (6.0, 3)] {
        let snap = session(swept(jitter_ns, seed), 3.0);
        let c = snap.clock().unwrap();
        let mv = snap.movement().unwrap();
        assert!(mv.moving, "a 1 → 3 MHz sweep moves");
        let lo = mv.low_hz.unwrap();
        let hi = mv.high_hz.unwrap();
        assert!(lo < 1.05e6 && hi > 2.9e6, "{lo} … {hi}");
        let j = mv.period_jitter_detrended_ns.unwrap();
        let u = mv.period_jitter_detrended_uncertainty_ns.unwrap();
        let whole = c.period_jitter_rms_ns.unwrap();
        println!("model {jitter_ns} ns: detrended {j:.3} ± {u:.3} ns, whole window {whole:.1} ns");
        assert!(
            (j - jitter_ns).abs() <= 0.15 * jitter_ns,
            "{j} ns against {jitter_ns} ns"
        );
        assert!(!mv.period_jitter_detrended_below_resolution);
        assert!(
            whole > 20.0 * jitter_ns,
            "the whole window is the sweep's spread"
        );
    }
}

/// A steady clock is not moving, and gets no detrended figures (its own apply).
#[test]
fn a_steady_clock_is_not_moving() {
    let mut m = BenchModel::scenario("steady").unwrap();
    m.burst_edges = Some(2000);
    m.burst_every_s = 0.02;
    m.analog_rate_hz = 1000.0;
    let snap = session(m, 2.0);
    let mv = snap.movement().unwrap();
    assert!(!mv.moving, "χ²/ν {:?}", mv.chi2_per_dof);
    assert!(mv.intervals >= 15, "{}", mv.intervals);
    assert!(mv.period_jitter_detrended_ns.is_none());
    assert!(mv.tie_detrended_pkpk_ns.is_none());
}

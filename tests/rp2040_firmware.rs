//! The RP2040 probe firmware, built and run in the rp2040js emulator by `make -C
//! firmware-protocol/rp2040 test`; the host decoder and engine then read the captured byte
//! streams, and the worst cycles and violation counts they give must match what the harness
//! drove (its `.truth` files, written from the driven edge times, not from the probe).
//! Needs arm-none-eabi-gcc, Node.js and the npm package installed by `npm ci` in
//! firmware-protocol/rp2040; without them the test says so and passes, unless
//! SLACKMETER_REQUIRE_RP2040 is set (CI sets it).
//! Figures hold for the emulator, not for silicon (see firmware-protocol/rp2040/README.md).

use std::collections::HashMap;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::sync::OnceLock;

use slackmeter::measure::Snapshot;

mod common;

/// The probe's tick: two cycles of its 125 MHz system clock (HELLO says 62.5 MHz).
const TICK_NS: f64 = 16.0;

fn tools_present() -> bool {
    let ok = |c: &mut Command| c.output().map(|o| o.status.success()).unwrap_or(false);
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("firmware-protocol/rp2040");
    ok(Command::new("arm-none-eabi-gcc").arg("--version"))
        && ok(Command::new("node").arg("--version"))
        && dir.join("node_modules/rp2040js/package.json").is_file()
}

/// Build and run the harness once; the capture directory, or None when the tools are absent.
fn captures() -> Option<&'static Path> {
    static DIR: OnceLock<Option<PathBuf>> = OnceLock::new();
    DIR.get_or_init(|| {
        if !tools_present() {
            assert!(
                std::env::var_os("SLACKMETER_REQUIRE_RP2040").is_none(),
                "SLACKMETER_REQUIRE_RP2040 is set but arm-none-eabi-gcc, node or the rp2040js \
                 package (npm ci in firmware-protocol/rp2040) is missing"
            );
            eprintln!(
                "SKIPPED: RP2040 tools absent (apt-get install gcc-arm-none-eabi \
                 libnewlib-arm-none-eabi nodejs npm; then npm ci in firmware-protocol/rp2040); \
                 the RP2040 firmware tests did not run"
            );
            return None;
        }
        Some(common::firmware::run_harness("rp2040"))
    })
    .as_deref()
}

/// The host's session snapshot of one captured stream, and what was driven.
fn analyse(dir: &Path, name: &str) -> (Snapshot, HashMap<String, String>) {
    let (snapshot, truth) = common::firmware::analyse_capture(dir, name);
    let t = truth
        .lines()
        .filter_map(|l| l.split_once(' '))
        .map(|(k, v)| (k.to_string(), v.trim().to_string()))
        .collect();
    (snapshot, t)
}

fn num(t: &HashMap<String, String>, k: &str) -> f64 {
    t.get(k)
        .unwrap_or_else(|| panic!("truth has no {k}"))
        .parse()
        .expect("number")
}

/// Every driven cycle seen: the worst and longest phases within one tick of the driven ones,
/// every short phase counted, the frequency within the uncertainty the host states.
#[test]
fn window_extremes_give_the_worst_cycle_of_every_cycle() {
    let Some(dir) = captures() else { return };
    for name in ["extremes", "extremes-fast"] {
        let (s, t) = analyse(dir, name);
        assert_eq!(s.trust.crc_errors, 0, "{name}");
        assert_eq!(s.trust.lost_frames, 0, "{name}");
        let c = s.clocks.iter().find(|c| c.label == "CLK").expect("CLK");
        assert_eq!(c.observation, "window-extremes", "{name}");
        assert_eq!(c.coverage, Some(1.0), "{name}: every window arrived");
        assert_eq!(c.cycles as f64, num(&t, "cycles"), "{name}: cycles counted");
        for (fig, got, key) in [
            ("high min", c.high_min_ns, "high_min_ticks"),
            ("high max", c.high_max_ns, "high_max_ticks"),
            ("low min", c.low_min_ns, "low_min_ticks"),
            ("low max", c.low_max_ns, "low_max_ticks"),
        ] {
            let got = got.unwrap_or_else(|| panic!("{name}: no {fig}"));
            let want = num(&t, key) * TICK_NS;
            println!("{name}: {fig} {got} ns (driven {want} ns)");
            assert!(
                (got - want).abs() <= TICK_NS,
                "{name}: {fig} {got} ns vs driven {want} ns (±1 tick)"
            );
        }
        let v = c.violations.as_ref().expect("threshold counts");
        println!(
            "{name}: {} high and {} low phases short (driven {} and {})",
            v.high_short, v.low_short, t["shorts_high"], t["shorts_low"]
        );
        assert_eq!(v.high_short as f64, num(&t, "shorts_high"), "{name}");
        assert_eq!(v.low_short as f64, num(&t, "shorts_low"), "{name}");
        assert_eq!(
            v.high_threshold_ns,
            Some(num(&t, "high_threshold_ticks") * TICK_NS)
        );
        assert_eq!(
            v.first.len() as u64,
            v.total(),
            "{name}: every short phase stamped"
        );
        let f = num(&t, "frequency_hz");
        let got = c.frequency_hz.expect("frequency");
        let u = c.frequency_uncertainty_hz.expect("uncertainty");
        println!("{name}: {got:.2} Hz ± {u:.2} (driven {f})");
        assert!((got - f).abs() <= u, "{name}: {got} vs {f} ± {u}");
    }
}

/// The probe describes itself as the extremes class with a 62.5 MHz tick, and the command
/// session decodes without damage.
#[test]
fn command_session_decodes_cleanly() {
    let Some(dir) = captures() else { return };
    let (s, _) = analyse(dir, "commands");
    let p = s.probe.as_ref().expect("probe description");
    println!("{p:?}");
    assert_eq!(s.trust.crc_errors, 0);
    assert_eq!(s.trust.lost_frames, 0);
}

/// Per-edge stamps (edge mode 0) give the driven frequency and duty.
#[test]
fn per_edge_stamps_give_frequency_and_duty() {
    let Some(dir) = captures() else { return };
    let (s, t) = analyse(dir, "stamps");
    let c = s.clocks.iter().find(|c| c.label == "CLK").expect("CLK");
    let f = num(&t, "frequency_hz");
    let got = c.frequency_hz.expect("frequency");
    let u = c.frequency_uncertainty_hz.expect("uncertainty");
    println!(
        "stamps: {got:.3} Hz ± {u:.3} (driven {f}), {} cycles",
        c.cycles
    );
    assert!(c.cycles as f64 >= num(&t, "edges") / 2.0 - 2.0);
    assert!((got - f).abs() <= u, "{got} vs {f} ± {u}");
    let d = num(&t, "duty");
    let duty = c.duty.expect("duty");
    let ud = c.duty_uncertainty.expect("duty uncertainty");
    assert!(
        (duty - d).abs() <= ud.max(1e-3),
        "duty {duty} vs {d} ± {ud}"
    );
}

/// A clock too fast for every cycle: windows flagged lost and counted, never made up.
#[test]
fn overrun_is_reported_not_hidden() {
    let Some(dir) = captures() else { return };
    let (s, t) = analyse(dir, "overrun");
    println!("overrun trust: {:?}", s.trust);
    assert!(s.trust.probe_lost_flags > 0);
    let c = s.clocks.iter().find(|c| c.label == "CLK").expect("CLK");
    assert!((c.cycles as f64) < num(&t, "cycles"), "{} cycles", c.cycles);
    assert!(
        c.coverage.is_some_and(|x| x < 1.0),
        "coverage {:?}",
        c.coverage
    );
}

//! Rails, lines and trust counters through the virtual probe (the engine must report what the
//! bench model drove).

use slackmeter::measure::{EngineConfig, Feed, Window};
use slackmeter::sim::{BenchModel, RailModel, RippleShape, SimProbe};

fn run(m: BenchModel, seconds: f64) -> Feed {
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(seconds * 1e9);
    p.flush_all();
    let mut f = Feed::new(EngineConfig::default());
    f.push(&std::mem::take(p.output()));
    f
}

#[test]
fn sags_are_found_with_their_depth_and_the_worst_rail_is_named() {
    let mut m = BenchModel::scenario("steady").unwrap();
    m.freq_hz = 100e3;
    m.rails = vec![
        RailModel {
            noise_mv: 3.0,
            ..RailModel::quiet("VCC_NEAR", 5020.0)
        },
        RailModel {
            sag_rate_hz: 5.0,
            sag_depth_mv: 400.0,
            sag_ms: 40.0,
            noise_mv: 3.0,
            ..RailModel::quiet("VCC_FAR", 4880.0)
        },
    ];
    let f = run(m, 4.0);
    let s = f.engine.snapshot(Window::Session);
    let far = s.rail("VCC_FAR").unwrap();
    let near = s.rail("VCC_NEAR").unwrap();
    // Poisson with mean 5/s over ~3.8 s of sag process: 19 ± 4.4; allow ±3σ
    assert!(
        (6..=33).contains(&far.sag_events),
        "{} sags",
        far.sag_events
    );
    assert_eq!(near.sag_events, 0);
    assert!(
        (far.deepest_sag_mv - 400.0).abs() < 30.0,
        "depth {}",
        far.deepest_sag_mv
    );
    assert!(
        (far.min_mv.unwrap() - 4480.0).abs() < 30.0,
        "min {:?}",
        far.min_mv
    );
    assert!(
        far.below_limit_s > 0.0,
        "4.48 V is below the 4.5 V default limit for a while"
    );
    assert_eq!(near.below_limit_s, 0.0);
    assert!((near.mean_mv.unwrap() - 5020.0).abs() < 2.0);
    // noise: 3 mV RMS Gaussian plus the 2 mV ADC step (uniform, 2/√12 = 0.58 mV)
    let noise = near.noise_rms_mv.unwrap();
    assert!(
        (noise - (9.0f64 + 0.33).sqrt()).abs() < 0.3,
        "noise {noise}"
    );
    assert_eq!(s.worst_rail.as_ref().unwrap().0, "VCC_FAR");
    assert!(s.sag_events.iter().all(|(r, _)| r == "VCC_FAR"));
}

#[test]
fn heartbeat_rate_and_fault_events() {
    let mut m = BenchModel::scenario("sweep").unwrap();
    m.heartbeat_hz = 4.0;
    m.fault = Some(slackmeter::sim::FaultLimit {
        by_vcc: vec![(0.0, 200.0, 200.0, 400.0), (9.0, 200.0, 200.0, 400.0)],
        source: "test".into(),
    });
    // a 200 ns phase at 47 % duty breaks at 2.35 MHz: (2.35 − 1)/5 × 30 s = 8.1 s into the sweep
    let f = run(m, 10.0);
    let s = f.engine.snapshot(Window::Session);
    let hb = s.line(slackmeter::probe::LineRole::Heartbeat).unwrap();
    let fault = s.line(slackmeter::probe::LineRole::Fault).unwrap();
    assert_eq!(fault.level, Some(true));
    let at = fault.events.last().unwrap().at_s;
    assert!((7.0..8.2).contains(&at), "fault at {at} s");
    // heartbeat at 4 Hz until the fault, then silent
    let rate = hb.rate_hz.unwrap();
    assert!((rate - 4.0).abs() < 0.2, "rate {rate}");
    assert!(hb.since_change_s.unwrap() > 1.5, "stopped after the fault");
    assert!(hb.events.last().unwrap().at_s < at + 0.26);
}

#[test]
fn dropped_frames_show_in_the_trust_counters() {
    let m = BenchModel::scenario("steady").unwrap();
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(200e6);
    p.flush_all();
    let bytes = std::mem::take(p.output());
    // cut out 30 whole frames in the middle, as a lossy link would
    let zeros: Vec<usize> = bytes
        .iter()
        .enumerate()
        .filter(|(_, b)| **b == 0)
        .map(|(i, _)| i)
        .collect();
    let (a, b) = (zeros[100] + 1, zeros[130] + 1);
    let mut damaged = bytes[..a].to_vec();
    damaged.extend_from_slice(&bytes[b..]);
    // and flip a bit in a later frame
    let k = zeros[200] + 5;
    damaged[k - (b - a)] ^= 0x10;
    let mut f = Feed::new(EngineConfig::default());
    f.push(&damaged);
    let t = f.engine.snapshot(Window::Session).trust;
    assert_eq!(t.lost_frames, 31, "30 cut out plus the damaged one");
    assert_eq!(t.crc_errors + t.other_rejects, 1);
    assert!(!t.clean());
    let mut clean = Feed::new(EngineConfig::default());
    clean.push(&bytes);
    assert!(clean.engine.snapshot(Window::Session).trust.clean());
}

#[test]
fn a_stopped_heartbeat_marks_a_failure_onset_when_there_is_no_fault_line() {
    let mut m = BenchModel::scenario("sweep").unwrap();
    m.heartbeat_hz = 10.0;
    // the machine fails (heartbeat stops) but this probe has no fault line wired: the sim's fault
    // channel simply stays silent because we drop its events from the stream below
    // fail on a phase shorter than 1 µs: at 47 % duty that is 470 kHz, reached 1.75 s into a
    // 400 → 520 kHz sweep over 3 s (jitter brings it slightly earlier)
    m.fault = Some(slackmeter::sim::FaultLimit {
        by_vcc: vec![(0.0, 1000.0, 1000.0, 2000.0), (9.0, 1000.0, 1000.0, 2000.0)],
        source: "test".into(),
    });
    m.sweep = Some(slackmeter::sim::Sweep {
        from_hz: 400e3,
        to_hz: 520e3,
        over_s: 3.0,
    });
    m.freq_hz = 400e3;
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(2.3e9);
    p.flush_all();
    let bytes = std::mem::take(p.output());
    // keep every frame except the fault line's (channel 2) LINES frames
    let mut keep = Vec::new();
    let mut d = firmware_protocol::StreamDecoder::new();
    let mut wire = [0u8; firmware_protocol::MAX_WIRE];
    d.push(&bytes, |f| {
        let fault_line =
            f.header.msg_type == firmware_protocol::types::LINES && f.body.first() == Some(&2);
        if !fault_line {
            let n =
                firmware_protocol::encode_frame(f.header.msg_type, f.header.seq, f.body, &mut wire)
                    .unwrap();
            keep.extend_from_slice(&wire[..n]);
        }
    });
    let mut f = Feed::new(EngineConfig::default());
    f.push(&keep);
    let s = f.engine.snapshot(Window::Session);
    let o = s
        .fault_onsets
        .first()
        .expect("an onset from the stopped heartbeat");
    assert_eq!(o.cause, "heartbeat stopped");
    // the onset is the last heartbeat before the failure: at most one heartbeat interval (50 ms)
    // before it, and the failure comes at or a little before 1.75 s
    assert!((1.3..1.8).contains(&o.at_s), "{}", o.at_s);
    let f_then = 400e3 + 40e3 * o.at_s;
    assert!(
        (o.frequency_hz - f_then).abs() < 2e3,
        "{} vs {f_then}",
        o.frequency_hz
    );
}

/// Whatever well-formed messages a probe sends (any ticks, channels, counts, restarts), the
/// engine takes them without panicking and its snapshot stays finite where it reports numbers.
#[test]
fn arbitrary_probe_messages_never_panic_the_engine() {
    use firmware_protocol::*;
    let mut x: u64 = 0xdead_beef;
    let mut rnd = |n: u64| {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        x % n.max(1)
    };
    let chans = [
        Channel::edge(0, 7, "CLK"),
        Channel::line(1, roles::FAULT, "F"),
        Channel {
            id: 2,
            kind: ChannelKind::Analog,
            info: 12,
            label: "V",
            scale_num_uv: -5000,
            scale_den: 3,
            offset_uv: i32::MAX,
        },
    ];
    for round in 0..300 {
        let mut f = Feed::new(EngineConfig::default());
        let mut wire = [0u8; MAX_WIRE];
        let mut bytes = Vec::new();
        for i in 0..40u16 {
            let pick = rnd(6);
            let big = [0u64, 1, 255, u32::MAX as u64, u64::MAX / 2, u64::MAX - 5][rnd(6) as usize];
            let m = match pick {
                0 => Message::Hello(Hello {
                    protocol_version: 1,
                    probe_class: 0,
                    tick_num_hz: 1 + rnd(u64::MAX / 2),
                    tick_den: 1 + rnd(1000) as u32,
                    timebase_ppm: 50,
                    max_edge_rate_khz: 0,
                    firmware: "x",
                    channels: Channels::List(&chans),
                }),
                1 | 2 => {
                    let mut body = [0u8; MAX_BODY];
                    let mut w = EdgeWriter::new(
                        &mut body,
                        rnd(3) as u8,
                        rnd(2) == 0,
                        rnd(4) as u8,
                        big.wrapping_add(rnd(1000)),
                    );
                    let mut t = big;
                    for _ in 0..rnd(200) {
                        let span = if rnd(2) == 0 { 3 } else { 1 << 40 };
                        t = t.wrapping_add(1 + rnd(span));
                        if !w.push(t) {
                            break;
                        }
                    }
                    let n = w.finish();
                    let ty = if pick == 1 {
                        types::EDGES
                    } else {
                        types::LINES
                    };
                    let len = encode_frame(ty, i, &body[..n], &mut wire).unwrap();
                    bytes.extend_from_slice(&wire[..len]);
                    continue;
                }
                3 => {
                    let raw: Vec<u8> = (0..rnd(40) * 2).map(|_| rnd(256) as u8).collect();
                    let msg = Message::Analog(Analog {
                        channel: rnd(4) as u8,
                        flags: rnd(2) as u8,
                        first_tick: big,
                        interval_ticks: 1 + rnd(u32::MAX as u64) as u32,
                        raw: &raw,
                    });
                    let len = encode_message(&msg, i, &mut wire).unwrap();
                    bytes.extend_from_slice(&wire[..len]);
                    continue;
                }
                4 => Message::Count(CountWindow {
                    channel: 0,
                    method: rnd(2) as u8,
                    start_tick: big,
                    gate_ticks: rnd(u32::MAX as u64) as u32,
                    edges: rnd(u32::MAX as u64) as u32,
                    samples: 10,
                    samples_high: rnd(11) as u32,
                }),
                _ => Message::Status(Status {
                    overflows: rnd(9) as u16,
                    ..Status::default()
                }),
            };
            let len = encode_message(&m, i, &mut wire).unwrap();
            bytes.extend_from_slice(&wire[..len]);
        }
        f.push(&bytes);
        for w in [Window::Session, Window::Recent] {
            let s = f.engine.snapshot(w);
            if let Some(c) = s.clock()
                && let Some(fr) = c.frequency_hz
            {
                assert!(!fr.is_nan(), "round {round}: NaN frequency");
            }
        }
    }
}

#[test]
fn ripple_and_noise_are_told_apart_and_noise_makes_no_sags() {
    // the bench model drives a sine of the given pk-pk and frequency plus Gaussian noise (its
    // definition in sim/bench.rs is the truth); the ADC step (2 mV, uniform) adds 2/√12 mV RMS
    let cases = [
        (24.0, 100.0, 5.0),
        (12.0, 50.0, 3.0),
        (40.0, 300.0, 2.0),
        (0.0, 100.0, 4.0),
    ];
    for (ripple, hz, noise) in cases {
        let mut m = BenchModel::scenario("steady").unwrap();
        m.freq_hz = 100e3;
        m.rails = vec![RailModel {
            ripple_mv: ripple,
            ripple_hz: hz,
            noise_mv: noise,
            ..RailModel::quiet("VCC", 5000.0)
        }];
        let f = run(m, 2.0);
        let s = f.engine.snapshot(Window::Session);
        let r = s.rail("VCC").unwrap();
        let want_noise = (noise * noise + 4.0 / 12.0f64).sqrt();
        let got_noise = r.noise_rms_mv.unwrap();
        assert!(
            (got_noise - want_noise).abs() < 0.05 * want_noise,
            "{ripple} mV at {hz} Hz: noise {got_noise} vs {want_noise}"
        );
        let got_ripple = r.ripple_pkpk_mv.unwrap();
        assert!(
            (got_ripple - ripple).abs() < 0.05 * ripple.max(10.0),
            "{ripple} mV at {hz} Hz: ripple {got_ripple}"
        );
        if ripple > 0.0 {
            let got_hz = r.ripple_hz.unwrap();
            assert!((got_hz - hz).abs() < 0.05 * hz, "{hz} Hz: found {got_hz}");
        }
        assert_eq!(r.sag_events, 0);
    }
    // a noisy rail with a sag threshold inside its noise: the threshold follows the noise
    let mut m = BenchModel::scenario("steady").unwrap();
    m.freq_hz = 100e3;
    m.rails = vec![RailModel {
        noise_mv: 8.0,
        ..RailModel::quiet("VCC", 5000.0)
    }];
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    p.run_until(2e9);
    p.flush_all();
    let mut cfg = EngineConfig::default();
    cfg.rail.sag_start_mv = 15.0;
    cfg.rail.sag_end_mv = 5.0;
    let mut f = Feed::new(cfg);
    f.push(&std::mem::take(p.output()));
    let r = f.engine.snapshot(Window::Session).rails[0].clone();
    assert!(r.sag_events <= 1, "{} sags from noise alone", r.sag_events);
}

#[test]
fn ripple_that_is_not_one_tone_keeps_its_pkpk_rms_and_noise() {
    // the truth is the bench model's waveform (sim/bench.rs): pk-pk over each 100 ms, RMS from the closed forms (sawtooth and triangle of amplitude A: A/√3; sine A/√2;
    // uncorrelated parts add in power); noise: Gaussian plus the 2 mV ADC step (uniform,
    // 2/√12 mV RMS, Widrow's model of quantisation)
    // (ripple pk-pk, Hz, shape, hum pk-pk, Hz, noise RMS, pk-pk and noise tolerance)
    type Case = (f64, f64, RippleShape, f64, f64, f64, f64, f64);
    let cases: [Case; 5] = [
        (
            30.0,
            250.0,
            RippleShape::Sawtooth,
            0.0,
            100.0,
            2.0,
            0.05,
            0.05,
        ),
        // a period that is not a whole number of samples (38.9): the drop is averaged over a
        // phase bin (the documented limit)
        (
            30.0,
            257.0,
            RippleShape::Sawtooth,
            0.0,
            100.0,
            2.0,
            0.08,
            0.10,
        ),
        (
            20.0,
            1250.0,
            RippleShape::Sawtooth,
            12.0,
            100.0,
            1.5,
            0.05,
            0.05,
        ),
        (
            16.0,
            640.0,
            RippleShape::Triangle,
            10.0,
            120.0,
            1.0,
            0.05,
            0.05,
        ),
        (
            10.0,
            2210.0,
            RippleShape::Sine,
            14.0,
            100.0,
            2.0,
            0.05,
            0.05,
        ),
    ];
    for (ripple, hz, shape, hum, hum_hz, noise, pk_tol, noise_tol) in cases {
        let mut m = BenchModel::scenario("steady").unwrap();
        m.freq_hz = 100e3;
        let rail = RailModel {
            ripple_mv: ripple,
            ripple_hz: hz,
            ripple_shape: shape,
            hum_mv: hum,
            hum_hz,
            noise_mv: noise,
            ..RailModel::quiet("VCC", 5000.0)
        };
        m.rails = vec![rail.clone()];
        let f = run(m, 2.0);
        let r = f
            .engine
            .snapshot(Window::Session)
            .rail("VCC")
            .unwrap()
            .clone();
        let wave = |t: f64| {
            0.5 * ripple * shape.at(hz * t)
                + 0.5 * hum * (2.0 * std::f64::consts::PI * hum_hz * t).sin()
        };
        // the probe samples at 0, 100 µs, 200 µs … (10 kHz): the ripple it can see is the
        // waveform at those instants
        let mut want_pk = 0.0;
        for seg in 0..20 {
            let (mut lo, mut hi) = (f64::MAX, f64::MIN);
            for i in 0..1000 {
                let v = wave((seg * 1000 + i) as f64 * 1e-4);
                lo = lo.min(v);
                hi = hi.max(v);
            }
            want_pk += (hi - lo) / 20.0;
        }
        let a = ripple / 2.0;
        let shape_ms = match shape {
            RippleShape::Sine => a * a / 2.0,
            RippleShape::Sawtooth | RippleShape::Triangle => a * a / 3.0,
        };
        let want_rms = (shape_ms + hum * hum / 8.0).sqrt();
        let want_noise = (noise * noise + 4.0 / 12.0f64).sqrt();
        let (pk, rms, nz) = (
            r.ripple_pkpk_mv.unwrap(),
            r.ripple_rms_mv.unwrap(),
            r.noise_rms_mv.unwrap(),
        );
        let what = format!("{shape:?} {ripple} mV at {hz} Hz + {hum} mV at {hum_hz} Hz");
        println!(
            "{what}: pk-pk {pk:.2} (truth {want_pk:.2}), RMS {rms:.2} ({want_rms:.2}), noise {nz:.3} ({want_noise:.3}), {:?} Hz",
            r.ripple_hz
        );
        assert!(
            (pk - want_pk).abs() < pk_tol * want_pk,
            "{what}: pk-pk {pk} vs {want_pk}"
        );
        assert!(
            (rms - want_rms).abs() < 0.03 * want_rms,
            "{what}: RMS {rms} vs {want_rms}"
        );
        assert!(
            (nz - want_noise).abs() < noise_tol * want_noise,
            "{what}: noise {nz} vs {want_noise}"
        );
        let strongest = if shape_ms > hum * hum / 8.0 {
            hz
        } else {
            hum_hz
        };
        let got_hz = r.ripple_hz.unwrap();
        assert!(
            (got_hz - strongest).abs() < 0.01 * strongest,
            "{what}: found {got_hz} Hz"
        );
        assert_eq!(r.sag_events, 0, "{what}");
    }
}

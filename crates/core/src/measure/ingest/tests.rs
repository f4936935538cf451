//! Tests of `ingest`.
use super::*;
use firmware_protocol::{Channel, MAX_WIRE, StreamDecoder, encode_frame, types};

/// An EDGES frame of channel 0 from its first tick and deltas, written by hand (a writer
/// refuses deltas that wrap).
fn edges_frame(out: &mut Vec<u8>, seq: u16, first: u64, deltas: &[u8]) {
    let mut body = vec![0u8, 1, 0];
    body.extend_from_slice(&(deltas.len() as u16 + 1).to_le_bytes());
    body.extend_from_slice(&first.to_le_bytes());
    body.extend_from_slice(deltas);
    let mut wire = [0u8; MAX_WIRE];
    let len = encode_frame(types::EDGES, seq, &body, &mut wire).unwrap();
    out.extend_from_slice(&wire[..len]);
}

/// What the ingest emits for a byte stream, as text.
fn events(bytes: &[u8]) -> Vec<String> {
    let mut ing = Ingest::new();
    let mut d = StreamDecoder::new();
    let mut out = Vec::new();
    d.push(bytes, |f| {
        ing.frame(&f, |ev| {
            out.push(match ev {
                Event::Probe { new, .. } => format!("probe new={new}"),
                e => format!("{e:?}"),
            })
        })
    });
    out
}

/// A batch whose ticks would run past 2^64 is refused by the message decoder and counted as
/// undecodable, never placed on the timeline; a later batch starting before the last one breaks continuity as a reversal.
#[test]
fn overflow_is_refused_and_reversal_becomes_a_break() {
    let mut b = Vec::new();
    let analog = Channel {
        id: 3,
        kind: firmware_protocol::ChannelKind::Analog,
        info: 10,
        label: "V",
        scale_num_uv: 5000,
        scale_den: 1,
        offset_uv: 0,
    };
    hello_frame(&mut b, &[Channel::edge(0, 1, "CLK"), analog]);
    let m = u64::MAX;
    edges_frame(&mut b, 1, 1000, &[100, 100]);
    edges_frame(&mut b, 2, m - 5, &[3, 3, 3]);
    edges_frame(&mut b, 3, 10, &[10, 10]);
    let ev = events(&b);
    let want = [
        "probe new=true".to_string(),
        "Edges { channel: 0, first_rising: true, ticks: [1000, 1100, 1200] }".into(),
        "Undecodable".into(),
        "Break { channel: 0, cause: Reversal { to_tick: 10 } }".into(),
        "Edges { channel: 0, first_rising: true, ticks: [10, 20, 30] }".into(),
    ];
    assert_eq!(ev, want);
}

/// After the same probe's HELLO, ticks that go on keep the timeline (a probe that kept
/// running while the link was down), ticks that start again are placed after everything
/// seen (a reset); a hole in the numbering breaks continuity as a link gap.
#[test]
fn a_probe_that_kept_running_keeps_its_timeline() {
    let clk = [Channel::edge(0, 1, "CLK")];
    let mut b = Vec::new();
    hello_frame(&mut b, &clk);
    edges_frame(&mut b, 1, 1000, &[100, 100]);
    // the link was down: HELLO numbered 9 (frames 2–8 lost), the probe's ticks went on
    let mut h = Vec::new();
    hello_frame(&mut h, &clk);
    let mut d = StreamDecoder::new();
    let mut body = Vec::new();
    d.push(&h, |f| body = f.body.to_vec());
    let mut wire = [0u8; MAX_WIRE];
    let n = encode_frame(types::HELLO, 9, &body, &mut wire).unwrap();
    b.extend_from_slice(&wire[..n]);
    edges_frame(&mut b, 10, 90_000, &[100, 100]);
    // a reset: HELLO numbered 0, ticks from the start again
    hello_frame(&mut b, &clk);
    edges_frame(&mut b, 1, 50, &[100]);
    let ev = events(&b);
    let want = [
        "probe new=true".to_string(),
        "Edges { channel: 0, first_rising: true, ticks: [1000, 1100, 1200] }".into(),
        "LinkGap { frames: 7 }".into(),
        "probe new=false".into(),
        "Edges { channel: 0, first_rising: true, ticks: [90000, 90100, 90200] }".into(),
        "probe new=false".into(),
        "Edges { channel: 0, first_rising: true, ticks: [90251, 90351] }".into(),
    ];
    assert_eq!(ev, want);
}

/// `place` finds the same prefix by its fast checks as by the tick-by-tick walk.
#[test]
fn placing_ticks_keeps_the_prefix_on_the_timeline() {
    let m = u64::MAX;
    for (ticks, off, single, want) in [
        (vec![1u64, 2, 3], Some(0), true, 3),
        (vec![1, 2, 3], Some(m - 2), true, 2),
        (vec![1, 2, 3], None, true, 0),
        (vec![m - 1, m, 0, 1], Some(0), false, 2),
        (vec![5, 1 << 40, 1 << 50], Some(m - (1 << 50) + 1), false, 2),
        (vec![5, 1 << 40, 1 << 50], Some(7), false, 3),
    ] {
        let mut t = ticks.clone();
        assert_eq!(place(&mut t, off, single), want, "{ticks:?} + {off:?}");
        for (a, b) in t[..want].iter().zip(&ticks) {
            assert_eq!(*a, b + off.unwrap_or(0));
        }
    }
}

/// EXTREMES and VIOLATIONS are placed on the timeline like any window: refused for a channel
/// that is not a clock, a lost-before flag breaks continuity, and after a probe reset (a HELLO
/// numbered 0, ticks from the start again) window and stamps move past everything seen.
#[test]
fn extremes_windows_are_placed_on_the_timeline() {
    use firmware_protocol::{ExtremesWindow, ShortPhase, Violations, encode_message};
    let clk = [Channel::edge(0, 8, "CLK"), Channel::line(1, 3, "HB")];
    let x = |channel: u8, start: u64, flags: u8| {
        Message::Extremes(ExtremesWindow {
            channel,
            flags,
            start_tick: start,
            window_ticks: 1000,
            cycles: 2,
            high_min_ticks: 100,
            high_max_ticks: 101,
            low_min_ticks: 99,
            low_max_ticks: 100,
            period_min_ticks: 199,
            period_max_ticks: 201,
            high_sum_ticks: 201,
            low_sum_ticks: 199,
            bin_origin_ticks: 0,
            bin_width_ticks: 1,
            bins: &[],
        })
    };
    let mut stamps = [0u8; 13];
    Violations::stamp_bytes(
        &[ShortPhase {
            tick: 1500,
            length_ticks: 9,
            high: true,
        }],
        &mut stamps,
    );
    let v = Message::Violations(Violations {
        channel: 0,
        flags: 0,
        start_tick: 1000,
        window_ticks: 1000,
        high_threshold_ticks: 10,
        low_threshold_ticks: 0,
        high_short: 1,
        low_short: 0,
        stamps: &stamps,
    });
    let mut b = Vec::new();
    let put = |b: &mut Vec<u8>, m: &Message<'_>, seq: u16| {
        let mut wire = [0u8; MAX_WIRE];
        let n = encode_message(m, seq, &mut wire).unwrap();
        b.extend_from_slice(&wire[..n]);
    };
    hello_frame(&mut b, &clk);
    put(&mut b, &x(0, 0, 0), 1);
    put(&mut b, &x(0, 1000, 1), 2);
    put(&mut b, &v, 3);
    // on the heartbeat line: not a clock
    put(&mut b, &x(1, 2000, 0), 4);
    // a reset: HELLO numbered 0, then a window from tick 0 again
    hello_frame(&mut b, &clk);
    put(&mut b, &x(0, 0, 0), 1);
    let ev = events(&b);
    let short: Vec<String> = ev
        .iter()
        .map(|e| e.split(", high").next().unwrap().to_string())
        .collect();
    let want = [
        "probe new=true",
        "Extremes(Extremes { channel: 0, lost_before: false, start_tick: 0, end_tick: 1000, cycles: 2",
        "Break { channel: 0, cause: Lost }",
        "Extremes(Extremes { channel: 0, lost_before: true, start_tick: 1000, end_tick: 2000, cycles: 2",
        "Thresholds(ThresholdCount { channel: 0, start_tick: 1000, end_tick: 2000",
        "Unknown { channel: 1, lost_before: false }",
        "probe new=false",
        "Extremes(Extremes { channel: 0, lost_before: false, start_tick: 2001, end_tick: 3001, cycles: 2",
    ];
    assert_eq!(short, want, "{ev:#?}");
    assert!(ev[4].contains("stamps: [(1500, 9, true)"), "{}", ev[4]);
}

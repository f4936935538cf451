//! Tests of `probe`.
use super::*;
use crate::sim::model::BenchModel;

fn frames(bytes: &[u8]) -> Vec<(u8, Vec<u8>)> {
    let mut d = StreamDecoder::new();
    let mut out = Vec::new();
    d.push(bytes, |f| out.push((f.header.msg_type, f.body.to_vec())));
    assert_eq!(d.counters.rejected(), 0);
    assert_eq!(d.counters.lost_frames, 0);
    out
}

#[test]
fn hello_first_then_data_only_after_start() {
    let mut p = SimProbe::new(
        BenchModel::scenario("steady").unwrap(),
        vec!["sim: test".into()],
    );
    p.run_until(5e6);
    let f = frames(&std::mem::take(p.output()));
    assert_eq!(f[0].0, types::HELLO);
    assert_eq!(f[1].0, types::LOG);
    assert!(
        f.iter().all(|(t, _)| *t != types::EDGES),
        "no data before START"
    );
    p.start();
    p.run_until(30e6);
    p.flush_all();
    let f = frames(&std::mem::take(p.output()));
    assert!(f.iter().any(|(t, _)| *t == types::EDGES));
    assert!(f.iter().any(|(t, _)| *t == types::ANALOG));
}

/// An extremes probe takes its thresholds and window from the host's CONFIGURE and sends
/// one VIOLATIONS per window after its EXTREMES; a stamping probe refuses them.
#[test]
fn an_extremes_probe_takes_its_thresholds_from_the_host() {
    let mut m = BenchModel::scenario("steady").unwrap();
    m.probe_class = ProbeClass::Extremes;
    let mut p = SimProbe::new(m.clone(), vec![]);
    let mut wire = [0u8; MAX_WIRE];
    let mut host = Vec::new();
    for (seq, param, value) in [
        (0u16, params::HIGH_THRESHOLD_TICKS, 20u32),
        (1, params::WINDOW_TICKS, 250_000),
        (2, params::EDGE_MODE, 3),
    ] {
        let c = Message::Configure(proto::Configure {
            channel: CH_CLOCK,
            param,
            value,
        });
        let n = proto::encode_message(&c, seq, &mut wire).unwrap();
        host.extend_from_slice(&wire[..n]);
    }
    p.output().clear();
    p.handle_host(&host);
    p.start();
    p.run_until(20e6);
    p.flush_all();
    let f = frames(&std::mem::take(p.output()));
    let n_of = |t| f.iter().filter(|(ty, _)| *ty == t).count();
    assert_eq!(n_of(types::ACK), 3);
    // 20 ms in windows of 250 000 ticks (2 ms at 8 ns)
    assert_eq!(n_of(types::EXTREMES), 10);
    assert_eq!(n_of(types::VIOLATIONS), 10);
    assert_eq!(n_of(types::EDGES), 0);
    let v = f.iter().find(|(t, _)| *t == types::VIOLATIONS).unwrap();
    let rf = proto::RawFrame {
        header: proto::Header {
            version: 1,
            msg_type: types::VIOLATIONS,
            seq: 0,
        },
        body: &v.1,
        lost_before: 0,
    };
    let Message::Violations(v) = Message::decode(&rf).unwrap() else {
        panic!()
    };
    assert_eq!((v.high_threshold_ticks, v.low_threshold_ticks), (20, 0));
    assert_eq!(v.window_ticks, 250_000);
    // a stamping probe has no thresholds
    let mut s = SimProbe::new(BenchModel::scenario("steady").unwrap(), vec![]);
    assert_eq!(
        s.configure(CH_CLOCK, params::HIGH_THRESHOLD_TICKS, 20).0,
        results::BAD_PARAM
    );
    assert_eq!(
        s.configure(CH_CLOCK, params::EDGE_MODE, 3).0,
        results::BAD_VALUE
    );
}

#[test]
fn commands_are_acknowledged() {
    let mut p = SimProbe::new(BenchModel::scenario("steady").unwrap(), vec![]);
    p.output().clear();
    let mut wire = [0u8; MAX_WIRE];
    let mut host = Vec::new();
    for (seq, m) in [
        (0u16, Message::Ping(42)),
        (
            1,
            Message::Configure(proto::Configure {
                channel: params::PROBE,
                param: params::STATUS_INTERVAL_MS,
                value: 500,
            }),
        ),
        (
            2,
            Message::Configure(proto::Configure {
                channel: 77,
                param: 1,
                value: 1,
            }),
        ),
        (3, Message::Start),
        (4, Message::Describe),
    ] {
        let n = proto::encode_message(&m, seq, &mut wire).unwrap();
        host.extend_from_slice(&wire[..n]);
    }
    // a damaged command
    let n = proto::encode_message(&Message::Stop, 5, &mut wire).unwrap();
    wire[2] ^= 0x40;
    host.extend_from_slice(&wire[..n]);
    p.handle_host(&host);
    let f = frames(&std::mem::take(p.output()));
    let acks: Vec<Ack> = f
        .iter()
        .filter(|(t, _)| *t == types::ACK)
        .map(|(t, b)| {
            let rf = proto::RawFrame {
                header: proto::Header {
                    version: 1,
                    msg_type: *t,
                    seq: 0,
                },
                body: b,
                lost_before: 0,
            };
            match Message::decode(&rf).unwrap() {
                Message::Ack(a) => a,
                _ => unreachable!(),
            }
        })
        .collect();
    assert_eq!(
        acks[0],
        Ack {
            acked_seq: 0xFFFF,
            command: 0,
            result: results::BAD_FRAME,
            value: 0
        }
    );
    assert_eq!(acks[1].value, 42);
    assert_eq!((acks[2].result, acks[2].value), (results::OK, 500));
    assert_eq!(acks[3].result, results::BAD_CHANNEL);
    assert_eq!((acks[4].acked_seq, acks[4].command), (3, types::START));
    assert!(
        f.iter().any(|(t, _)| *t == types::HELLO),
        "DESCRIBE answered by HELLO"
    );
    assert!(p.streaming());
}

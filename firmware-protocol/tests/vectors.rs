//! Test vectors: the canonical example messages, the vector files under `vectors/`, and the hex
//! examples in PROTOCOL.md must agree. Regenerate `messages.vec` with `SLACKMETER_BLESS=1 cargo
//! test`; `extremes.vec` is written by hand from PROTOCOL.md's tables and never regenerated:
//! its fields are checked here against the numbers its descriptions give.

use std::fmt::Write as _;
use std::path::Path;

use firmware_protocol::*;

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

fn unhex(s: &str) -> Vec<u8> {
    let s: String = s.split_whitespace().collect();
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).unwrap())
        .collect()
}

const CHANNELS: &[Channel<'static>] = &[
    Channel::edge(
        0,
        caps::TIMESTAMPS | caps::COUNT_WINDOWS | caps::LEVEL_SAMPLING,
        "CLK",
    ),
    Channel::line(1, roles::HEARTBEAT, "HEARTBEAT"),
    Channel::line(2, roles::FAULT, "FAULT"),
    Channel {
        id: 3,
        kind: ChannelKind::Analog,
        info: 12,
        label: "VCC_FAR",
        scale_num_uv: 2000,
        scale_den: 1,
        offset_uv: 0,
    },
];

/// (name, description, seq, message, text of the fields for readers of the spec)
fn examples(deltas: &'static [u8]) -> Vec<(&'static str, &'static str, u16, Message<'static>)> {
    vec![
        (
            "hello",
            "self-description of a probe with a 125 MHz (8 ns) tick: clock, heartbeat, fault, one rail",
            0,
            Message::Hello(Hello {
                protocol_version: 1,
                probe_class: 0,
                tick_num_hz: 125_000_000,
                tick_den: 1,
                timebase_ppm: 50,
                max_edge_rate_khz: 20_000,
                firmware: "example-probe 1.0",
                channels: Channels::List(CHANNELS),
            }),
        ),
        (
            "hello-fractional-tick",
            "a 7 ns tick: tick rate 1000000000/7 Hz, no channels",
            0,
            Message::Hello(Hello {
                protocol_version: 1,
                probe_class: 0,
                tick_num_hz: 1_000_000_000,
                tick_den: 7,
                timebase_ppm: 0,
                max_edge_rate_khz: 0,
                firmware: "t7",
                channels: Channels::List(&[]),
            }),
        ),
        (
            "edges",
            "four edges on channel 0, first rising at tick 1000, then +250 +250 +300 ticks",
            1,
            Message::Edges(Edges {
                channel: 0,
                first_rising: true,
                flags: 0,
                count: 4,
                first_tick: 1000,
                deltas,
            }),
        ),
        (
            "lines",
            "heartbeat line: rises at tick 2^32, falls 1,000,000 ticks later",
            2,
            Message::Lines(Edges {
                channel: 1,
                first_rising: true,
                flags: 0,
                count: 2,
                first_tick: 1 << 32,
                deltas: &[0xc0, 0x84, 0x3d],
            }),
        ),
        (
            "count-gated",
            "gated count: 250 rising edges in a 125,000-tick gate (1 ms at 8 ns), 1000 level samples, 500 high",
            3,
            Message::Count(CountWindow {
                channel: 0,
                method: methods::GATED,
                start_tick: 125_000,
                gate_ticks: 125_000,
                edges: 250,
                samples: 1000,
                samples_high: 500,
            }),
        ),
        (
            "count-reciprocal",
            "reciprocal: 1000 input cycles spanned 62,500 ticks",
            4,
            Message::Count(CountWindow {
                channel: 0,
                method: methods::RECIPROCAL,
                start_tick: 0,
                gate_ticks: 62_500,
                edges: 1000,
                samples: 0,
                samples_high: 0,
            }),
        ),
        (
            "analog",
            "three samples of channel 3 every 12,500 ticks from tick 0: 2500, 2490, 2455 (×2 mV = 5.000, 4.980, 4.910 V)",
            5,
            Message::Analog(Analog {
                channel: 3,
                flags: 0,
                first_tick: 0,
                interval_ticks: 12_500,
                raw: &[0xc4, 0x09, 0xba, 0x09, 0x97, 0x09],
            }),
        ),
        (
            "status",
            "status after one second: 120 frames, nothing lost",
            6,
            Message::Status(Status {
                uptime_ticks: 125_000_000,
                frames_sent: 120,
                edges_dropped: 0,
                samples_dropped: 0,
                overflows: 0,
                rx_bad_frames: 0,
                buffer_fill_pct: 3,
                state: 1,
            }),
        ),
        (
            "ack-configure",
            "acknowledges host frame 2 (CONFIGURE): ok, value in force 125000",
            7,
            Message::Ack(Ack {
                acked_seq: 2,
                command: types::CONFIGURE,
                result: results::OK,
                value: 125_000,
            }),
        ),
        (
            "ack-bad-frame",
            "a damaged host frame: sequence unknown",
            8,
            Message::Ack(Ack {
                acked_seq: 0xFFFF,
                command: 0,
                result: results::BAD_FRAME,
                value: 0,
            }),
        ),
        (
            "log",
            "probe text",
            9,
            Message::Log(Log {
                level: 0,
                text: "ready",
            }),
        ),
        ("describe", "host asks for HELLO", 0, Message::Describe),
        ("start", "host starts streaming", 1, Message::Start),
        ("stop", "host stops streaming", 4, Message::Stop),
        (
            "configure",
            "host sets channel 0's gate to 125,000 ticks",
            2,
            Message::Configure(Configure {
                channel: 0,
                param: params::GATE_TICKS,
                value: 125_000,
            }),
        ),
        (
            "ping",
            "host ping with nonce 0x12345678",
            3,
            Message::Ping(0x1234_5678),
        ),
        (
            "edges-top-of-range",
            "two edges whose last tick is 2^64 - 1, the largest tick there is (accepted)",
            10,
            Message::Edges(Edges {
                channel: 0,
                first_rising: false,
                flags: 0,
                count: 2,
                first_tick: u64::MAX - 10,
                deltas: &[10],
            }),
        ),
    ]
}

const EDGE_DELTAS: &[u8] = &[0xfa, 0x01, 0xfa, 0x01, 0xac, 0x02];

/// Frames with a valid CRC whose bodies a receiver must refuse: (name, description, type, seq,
/// body, reason as written after `reject`).
type Rejected = (&'static str, &'static str, u8, u16, Vec<u8>, &'static str);

fn rejected() -> Vec<Rejected> {
    let edges = |count: u16, first_tick: u64, deltas: &[u8]| {
        let mut b = vec![0u8, 1, 0];
        b.extend_from_slice(&count.to_le_bytes());
        b.extend_from_slice(&first_tick.to_le_bytes());
        b.extend_from_slice(deltas);
        b
    };
    let mut analog = vec![3u8, 0];
    analog.extend_from_slice(&2u16.to_le_bytes());
    analog.extend_from_slice(&(u64::MAX - 999).to_le_bytes());
    analog.extend_from_slice(&1000u32.to_le_bytes());
    analog.extend_from_slice(&[0xc4, 0x09, 0xba, 0x09]);
    vec![
        (
            "edges-tick-overflow",
            "refused: first tick 2^64 - 11, then +10 +1: the third tick would wrap past 2^64 - 1",
            types::EDGES,
            11,
            edges(3, u64::MAX - 10, &[10, 1]),
            "tick-overflow",
        ),
        (
            "lines-tick-overflow",
            "refused: first tick 2^64 - 200, then +200 (a two-byte delta): wraps to 0",
            types::LINES,
            12,
            edges(2, u64::MAX - 199, &[0xc8, 0x01]),
            "tick-overflow",
        ),
        (
            "analog-tick-overflow",
            "refused: two samples from tick 2^64 - 1000 every 1000 ticks: the second would wrap",
            types::ANALOG,
            13,
            analog,
            "tick-overflow",
        ),
    ]
}

fn render() -> String {
    let mut out = String::from(
        "# slackmeter probe protocol test vectors (protocol version 1)\n\
         # One vector per block, blocks end at a blank line. Lines: KEY VALUE.\n\
         #   name   vector name          desc  what it is\n\
         #   type   message type (hex)   seq   sequence number (hex, 4 digits)\n\
         #   body   message body (hex)   frame decoded frame: header, body, CRC-32 (hex)\n\
         #   wire   bytes on the wire: COBS(frame) then 00 (hex)\n\
         #   reject (refused vectors only) why a receiver refuses the body; the frame is intact\n",
    );
    for (name, desc, seq, m) in examples(EDGE_DELTAS) {
        let mut body = [0u8; MAX_BODY];
        let n = m.encode_body(&mut body).unwrap();
        let mut wire = [0u8; MAX_WIRE];
        let w = encode_message(&m, seq, &mut wire).unwrap();
        let mut frame = vec![VERSION, m.msg_type()];
        frame.extend_from_slice(&seq.to_le_bytes());
        frame.extend_from_slice(&body[..n]);
        let crc = crc32(&frame);
        frame.extend_from_slice(&crc.to_le_bytes());
        let _ = write!(
            out,
            "\nname {name}\ndesc {desc}\ntype {:02x}\nseq {seq:04x}\nbody {}\nframe {}\nwire {}\n",
            m.msg_type(),
            hex(&body[..n]),
            hex(&frame),
            hex(&wire[..w])
        );
    }
    for (name, desc, msg_type, seq, body, reason) in rejected() {
        let mut wire = [0u8; MAX_WIRE];
        let w = encode_frame(msg_type, seq, &body, &mut wire).unwrap();
        let mut frame = vec![VERSION, msg_type];
        frame.extend_from_slice(&seq.to_le_bytes());
        frame.extend_from_slice(&body);
        let crc = crc32(&frame);
        frame.extend_from_slice(&crc.to_le_bytes());
        let _ = write!(
            out,
            "\nname {name}\ndesc {desc}\ntype {msg_type:02x}\nseq {seq:04x}\nbody {}\nframe {}\nwire {}\nreject {reason}\n",
            hex(&body),
            hex(&frame),
            hex(&wire[..w])
        );
    }
    out
}

fn dir() -> std::path::PathBuf {
    Path::new(env!("CARGO_MANIFEST_DIR")).join("vectors")
}

struct Vector {
    name: String,
    seq: u16,
    msg_type: u8,
    body: Vec<u8>,
    frame: Vec<u8>,
    wire: Vec<u8>,
    /// Why a receiver refuses the body (None: it decodes).
    reject: Option<String>,
}

fn parse(text: &str) -> Vec<Vector> {
    let mut out = Vec::new();
    for block in text.split("\n\n") {
        let get = |k: &str| {
            block
                .lines()
                .find_map(|l| l.strip_prefix(&format!("{k} ")))
                .map(str::to_string)
        };
        let Some(name) = get("name") else { continue };
        out.push(Vector {
            name,
            seq: u16::from_str_radix(&get("seq").unwrap(), 16).unwrap(),
            msg_type: u8::from_str_radix(&get("type").unwrap(), 16).unwrap(),
            body: unhex(&get("body").unwrap_or_default()),
            frame: unhex(&get("frame").unwrap()),
            wire: unhex(&get("wire").unwrap()),
            reject: get("reject"),
        });
    }
    out
}

#[test]
fn vector_file_matches_the_code() {
    let path = dir().join("messages.vec");
    let want = render();
    if std::env::var_os("SLACKMETER_BLESS").is_some() {
        std::fs::write(&path, &want).unwrap();
    }
    let have =
        std::fs::read_to_string(&path).expect("vectors/messages.vec exists (bless to create)");
    assert_eq!(
        have, want,
        "vectors/messages.vec is stale: run SLACKMETER_BLESS=1 cargo test -p firmware-protocol"
    );
}

/// Every vector file: the generated one and the hand-written ones.
const FILES: &[&str] = &["messages.vec", "extremes.vec"];

fn all_vectors() -> Vec<Vector> {
    FILES
        .iter()
        .flat_map(|f| parse(&std::fs::read_to_string(dir().join(f)).unwrap()))
        .collect()
}

#[test]
fn every_vector_decodes_and_re_encodes_to_the_same_bytes() {
    let vectors = all_vectors();
    assert!(vectors.len() >= 22);
    for v in &vectors {
        let mut scratch = [0u8; MAX_WIRE];
        let f = decode_frame(&v.wire, &mut scratch).unwrap_or_else(|e| panic!("{}: {e:?}", v.name));
        assert_eq!(f.header.seq, v.seq, "{}", v.name);
        assert_eq!(f.header.msg_type, v.msg_type, "{}", v.name);
        assert_eq!(f.body, &v.body[..], "{}", v.name);
        assert_eq!(&v.frame[4..v.frame.len() - 4], &v.body[..], "{}", v.name);
        if let Some(reason) = &v.reject {
            let got = Message::decode(&f);
            match reason.as_str() {
                "tick-overflow" => assert_eq!(got, Err(DecodeError::TickOverflow), "{}", v.name),
                "bad-field" => assert!(
                    matches!(got, Err(DecodeError::BadField(_))),
                    "{}: {got:?}",
                    v.name
                ),
                r => panic!("{}: unknown reject reason {r}", v.name),
            }
            continue;
        }
        let m = Message::decode(&f).unwrap_or_else(|e| panic!("{}: {e:?}", v.name));
        let mut out = [0u8; MAX_WIRE];
        let n = encode_message(&m, v.seq, &mut out).unwrap();
        assert_eq!(&out[..n], &v.wire[..], "{}", v.name);
    }
}

#[test]
fn decoded_example_fields_are_the_documented_values() {
    let text = std::fs::read_to_string(dir().join("messages.vec")).unwrap();
    let v = parse(&text);
    let find = |n: &str| v.iter().find(|x| x.name == n).unwrap();
    let mut s = [0u8; MAX_WIRE];
    let e = find("edges");
    let f = decode_frame(&e.wire, &mut s).unwrap();
    let Message::Edges(edges) = Message::decode(&f).unwrap() else {
        panic!()
    };
    assert_eq!(
        edges.ticks().collect::<Vec<_>>(),
        vec![1000, 1250, 1500, 1800]
    );
    let l = find("lines");
    let f = decode_frame(&l.wire, &mut s).unwrap();
    let Message::Lines(lines) = Message::decode(&f).unwrap() else {
        panic!()
    };
    assert_eq!(
        lines.ticks().collect::<Vec<_>>(),
        vec![1 << 32, (1 << 32) + 1_000_000]
    );
    let a = find("analog");
    let f = decode_frame(&a.wire, &mut s).unwrap();
    let Message::Analog(an) = Message::decode(&f).unwrap() else {
        panic!()
    };
    assert_eq!(an.samples().collect::<Vec<_>>(), vec![2500, 2490, 2455]);
    let h = find("hello");
    let f = decode_frame(&h.wire, &mut s).unwrap();
    let Message::Hello(hello) = Message::decode(&f).unwrap() else {
        panic!()
    };
    let labels: Vec<&str> = hello.channels.iter().map(|c| c.label).collect();
    assert_eq!(labels, ["CLK", "HEARTBEAT", "FAULT", "VCC_FAR"]);
    assert_eq!(hello.channels.iter().nth(3).unwrap().scale_num_uv, 2000);
}

#[test]
fn protocol_md_hex_examples_are_vectors() {
    let md =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("PROTOCOL.md")).unwrap();
    let vectors = all_vectors();
    let mut found = 0;
    // examples are fenced blocks opened with ```hex and a first line "vector: NAME"
    for block in md.split("```hex").skip(1) {
        let block = block.split("```").next().unwrap();
        let mut lines = block.lines().filter(|l| !l.trim().is_empty());
        let name = lines
            .next()
            .and_then(|l| l.trim().strip_prefix("vector: "))
            .expect("example names its vector");
        let v = vectors
            .iter()
            .find(|v| v.name == name)
            .unwrap_or_else(|| panic!("PROTOCOL.md example {name} is not a vector"));
        let mut frame_hex = String::new();
        let mut wire_hex = String::new();
        for l in lines {
            let l = l.trim();
            if let Some(x) = l.strip_prefix("frame:") {
                frame_hex += x;
            } else if let Some(x) = l.strip_prefix("wire:") {
                wire_hex += x;
            }
        }
        assert_eq!(unhex(&frame_hex), v.frame, "PROTOCOL.md frame of {name}");
        assert_eq!(unhex(&wire_hex), v.wire, "PROTOCOL.md wire of {name}");
        found += 1;
    }
    assert!(found >= 6, "only {found} hex examples in PROTOCOL.md");
}

#[test]
fn independent_check_with_python_zlib() {
    // zlib.crc32 (a general-purpose reference library) and a COBS decoder written from the
    // paper's rules check every vector independently of this crate.
    let script = dir().join("check.py");
    let out = match std::process::Command::new("python3")
        .arg(&script)
        .args(FILES.iter().map(|f| dir().join(f)))
        .output()
    {
        Ok(o) => o,
        Err(e) => {
            eprintln!("python3 not available ({e}): independent check skipped");
            return;
        }
    };
    assert!(
        out.status.success(),
        "{}{}",
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    assert!(String::from_utf8_lossy(&out.stdout).contains("vectors ok"));
}

/// The hand-written vectors of the extremes class decode to the numbers their descriptions
/// (and PROTOCOL.md's tables) give: the layout is checked from outside the code.
#[test]
fn hand_written_extremes_vectors_hold_the_documented_values() {
    let v = parse(&std::fs::read_to_string(dir().join("extremes.vec")).unwrap());
    let find = |n: &str| v.iter().find(|x| x.name == n).unwrap();
    let mut s = [0u8; MAX_WIRE];
    let f = decode_frame(&find("hello-extremes").wire, &mut s).unwrap();
    let Message::Hello(h) = Message::decode(&f).unwrap() else {
        panic!()
    };
    assert_eq!(h.probe_class, classes::EXTREMES);
    assert_eq!(
        (h.tick_num_hz, h.tick_den, h.timebase_ppm),
        (125_000_000, 1, 50)
    );
    assert_eq!((h.max_edge_rate_khz, h.firmware), (2000, "xp"));
    let c = h.channels.iter().next().unwrap();
    assert_eq!((c.id, c.kind, c.label), (0, ChannelKind::Edge, "CLK"));
    assert_eq!(
        c.info,
        caps::TIMESTAMPS | caps::WINDOW_EXTREMES | caps::THRESHOLD_COUNTS
    );

    let mut s = [0u8; MAX_WIRE];
    let f = decode_frame(&find("extremes").wire, &mut s).unwrap();
    let Message::Extremes(x) = Message::decode(&f).unwrap() else {
        panic!()
    };
    // the four cycles of the description, reduced here independently of the decoder
    let cycles = [(60u32, 62u32), (61, 65), (62, 61), (63, 64)];
    let highs = cycles.map(|c| c.0);
    let lows = cycles.map(|c| c.1);
    let periods = cycles.map(|c| c.0 + c.1);
    assert_eq!(
        (x.channel, x.flags, x.start_tick, x.window_ticks),
        (0, 0, 1000, 500)
    );
    assert_eq!(x.cycles, 4);
    assert_eq!(
        (x.high_min_ticks, x.high_max_ticks),
        (*highs.iter().min().unwrap(), *highs.iter().max().unwrap())
    );
    assert_eq!(
        (x.low_min_ticks, x.low_max_ticks),
        (*lows.iter().min().unwrap(), *lows.iter().max().unwrap())
    );
    assert_eq!(
        (x.period_min_ticks, x.period_max_ticks),
        (
            *periods.iter().min().unwrap(),
            *periods.iter().max().unwrap()
        )
    );
    assert_eq!(x.high_sum_ticks, highs.iter().map(|&h| u64::from(h)).sum());
    assert_eq!(x.low_sum_ticks, lows.iter().map(|&l| u64::from(l)).sum());
    let mut bins = [0u32; 3];
    for p in periods {
        bins[((p - 120) / 4) as usize] += 1;
    }
    assert_eq!((x.bin_origin_ticks, x.bin_width_ticks), (120, 4));
    assert_eq!(x.bin_counts().collect::<Vec<_>>(), bins.to_vec());

    let mut s = [0u8; MAX_WIRE];
    let f = decode_frame(&find("violations").wire, &mut s).unwrap();
    let Message::Violations(vi) = Message::decode(&f).unwrap() else {
        panic!()
    };
    assert_eq!((vi.start_tick, vi.window_ticks), (1000, 500));
    assert_eq!((vi.high_threshold_ticks, vi.low_threshold_ticks), (62, 62));
    assert_eq!(
        vi.high_short as usize,
        highs.iter().filter(|&&h| h < 62).count()
    );
    assert_eq!(
        vi.low_short as usize,
        lows.iter().filter(|&&l| l < 62).count()
    );
    let stamps: Vec<(u64, u32, bool)> = vi
        .short_phases()
        .map(|p| (p.tick, p.length_ticks, p.high))
        .collect();
    assert_eq!(
        stamps,
        [(900, 60, true), (1022, 61, true), (1210, 61, false)]
    );

    let mut s = [0u8; MAX_WIRE];
    let f = decode_frame(&find("configure-high-threshold").wire, &mut s).unwrap();
    assert_eq!(
        Message::decode(&f).unwrap(),
        Message::Configure(Configure {
            channel: 0,
            param: params::HIGH_THRESHOLD_TICKS,
            value: 62
        })
    );
}

//! Bodies of the fuzz targets, one function per parser of outside bytes. Each must return
//! without panicking for any input; the assertions inside are properties that must hold.
//! `tests/regressions.rs` replays every input saved under `regressions/<target>/` on stable.

use firmware_protocol::{
    self as proto, Channel, ChannelKind, Channels, CountWindow, EdgeWriter, Header, Hello,
    MAX_BODY, MAX_WIRE, Message, RawFrame, Status, StreamDecoder, encode_message,
};
use slackmeter_core::budget::{Design, Library};
use slackmeter_core::diag::Source;
use slackmeter_core::measure::clock::{ClockConfig, ClockState};
use slackmeter_core::measure::{EngineConfig, Feed, Window};
use std::io::Cursor;

/// Names of the targets, as in `fuzz_targets/` and `regressions/`.
pub const TARGETS: [&str; 8] = [
    "stream_decoder",
    "message_body",
    "engine_feed",
    "clock_paths",
    "recording_chunks",
    "design_file",
    "part_library",
    "netlist",
];

/// Run target `name` on `data` (for the regression replay).
pub fn run(name: &str, data: &[u8]) {
    match name {
        "stream_decoder" => stream_decoder(data),
        "message_body" => message_body(data),
        "engine_feed" => engine_feed(data),
        "clock_paths" => clock_paths(data),
        "recording_chunks" => recording_chunks(data),
        "design_file" => design_file(data),
        "part_library" => part_library(data),
        "netlist" => netlist(data),
        _ => panic!("no fuzz target {name}"),
    }
}

/// A decoded message re-encodes to a frame that decodes to the same message.
fn round_trip(m: &Message<'_>, seq: u16) {
    let mut out = [0u8; MAX_WIRE];
    let n = encode_message(m, seq, &mut out).expect("a decoded message re-encodes");
    let mut d = StreamDecoder::new();
    let mut frames = 0;
    d.push(&out[..n], |g| {
        frames += 1;
        // reserved bits are not kept, so compare messages, not bytes
        assert_eq!(Message::decode(&g).as_ref(), Ok(m));
    });
    assert_eq!(frames, 1);
    if let Message::Edges(e) | Message::Lines(e) = m {
        assert_eq!(e.ticks().count(), usize::from(e.count));
    }
}

/// Any bytes, cut in two at a place the first byte chooses, through the stream decoder; every
/// frame it accepts decodes or is refused cleanly.
pub fn stream_decoder(data: &[u8]) {
    let split = data.first().map_or(0, |b| usize::from(*b)) % data.len().max(1);
    let (a, b) = data.split_at(split);
    let mut d = StreamDecoder::new();
    let mut check = |f: RawFrame<'_>| {
        if let Ok(m) = Message::decode(&f) {
            round_trip(&m, f.header.seq);
        }
    };
    d.push(a, &mut check);
    d.push(b, &mut check);
    assert!(d.counters.frames <= data.len() as u64);
}

/// A message body without framing or CRC (first byte: the type), so every body decoder is
/// reached directly.
pub fn message_body(data: &[u8]) {
    let Some((&msg_type, body)) = data.split_first() else {
        return;
    };
    let f = RawFrame {
        header: Header {
            version: proto::VERSION,
            msg_type,
            seq: 7,
        },
        body,
        lost_before: 0,
    };
    if let Ok(m) = Message::decode(&f) {
        round_trip(&m, 7);
    }
}

/// Bytes read in order, zeros after the end.
struct Take<'a>(&'a [u8]);

impl Take<'_> {
    fn u8(&mut self) -> u8 {
        match self.0.split_first() {
            Some((&b, rest)) => {
                self.0 = rest;
                b
            }
            None => 0,
        }
    }
    fn u16(&mut self) -> u16 {
        u16::from_le_bytes([self.u8(), self.u8()])
    }
    fn u32(&mut self) -> u32 {
        u32::from_le_bytes([self.u8(), self.u8(), self.u8(), self.u8()])
    }
    fn u64(&mut self) -> u64 {
        u64::from(self.u32()) | u64::from(self.u32()) << 32
    }
    fn done(&self) -> bool {
        self.0.is_empty()
    }
}

/// A first tick: usually small, sometimes anywhere, sometimes near the top of the range.
fn tick(t: &mut Take<'_>) -> u64 {
    match t.u8() % 4 {
        0 => u64::MAX - u64::from(t.u32()),
        1 => t.u64(),
        _ => u64::from(t.u32()),
    }
}

/// Frames with valid CRCs, built from the input as a probe's session would be (a HELLO, then
/// edges, lines, rails, count windows, status, repeats, jumps in the numbering and raw bytes),
/// through the engine's feed; snapshots of every window come out without panicking.
pub fn engine_feed(data: &[u8]) {
    let mut t = Take(data);
    let mut feed = Feed::new(EngineConfig::default());
    let mut seq: u16 = 0;
    let mut last = Vec::new();
    let mut wire = [0u8; MAX_WIRE];
    let labels = ["CLK", "HB", "FLT", "RST", "VCC", "V2", "X", ""];
    let mut steps = 0;
    while !t.done() && steps < 400 {
        steps += 1;
        let op = t.u8();
        let mut body = [0u8; MAX_BODY];
        let (msg_type, n) = match op % 11 {
            0 => {
                let count = usize::from(t.u8() % 9);
                let chans: Vec<Channel<'_>> = (0..count)
                    .map(|i| {
                        let k = t.u8();
                        Channel {
                            id: t.u8() % 10,
                            kind: match k % 3 {
                                0 => ChannelKind::Edge,
                                1 => ChannelKind::Line,
                                _ => ChannelKind::Analog,
                            },
                            info: t.u8(),
                            label: labels[i % labels.len()],
                            scale_num_uv: t.u32() as i32,
                            scale_den: t.u32(),
                            offset_uv: t.u16() as i16 as i32,
                        }
                    })
                    .collect();
                let hello = Message::Hello(Hello {
                    protocol_version: proto::VERSION,
                    probe_class: 0,
                    tick_num_hz: u64::from(t.u32()),
                    tick_den: u32::from(t.u8()),
                    timebase_ppm: t.u16(),
                    max_edge_rate_khz: t.u32(),
                    firmware: "fuzz",
                    channels: Channels::List(&chans),
                });
                match hello.encode_body(&mut body) {
                    Ok(n) => (hello.msg_type(), n),
                    Err(_) => continue,
                }
            }
            1 | 2 => {
                let channel = t.u8() % 10;
                let first_rising = t.u8() & 1 == 1;
                let flags = t.u8() & 3;
                let mut at = tick(&mut t);
                let count = t.u8();
                let step = u64::from(t.u16().max(1));
                let jitter = u64::from(t.u8());
                let mut w = EdgeWriter::new(&mut body, channel, first_rising, flags, at);
                for _ in 1..count {
                    let Some(next) = at.checked_add(step + u64::from(t.u8()) % (jitter + 1)) else {
                        break;
                    };
                    at = next;
                    if !w.push(at) {
                        break;
                    }
                }
                let ty = if op % 9 == 1 {
                    proto::types::EDGES
                } else {
                    proto::types::LINES
                };
                (ty, w.finish())
            }
            3 => {
                let count = usize::from(t.u8() % 64);
                let raw: Vec<u8> = (0..count * 2).map(|_| t.u8()).collect();
                let m = Message::Analog(proto::Analog {
                    channel: t.u8() % 10,
                    flags: t.u8() & 3,
                    first_tick: tick(&mut t),
                    interval_ticks: t.u32(),
                    raw: &raw,
                });
                match m.encode_body(&mut body) {
                    Ok(n) => (m.msg_type(), n),
                    Err(_) => continue,
                }
            }
            4 => {
                let m = Message::Count(CountWindow {
                    channel: t.u8() % 10,
                    method: t.u8() % 3,
                    start_tick: tick(&mut t),
                    gate_ticks: t.u32(),
                    edges: t.u32(),
                    samples: u32::from(t.u16()),
                    samples_high: u32::from(t.u16()),
                });
                match m.encode_body(&mut body) {
                    Ok(n) => (m.msg_type(), n),
                    Err(_) => continue,
                }
            }
            5 => {
                let m = Message::Status(Status {
                    uptime_ticks: tick(&mut t),
                    frames_sent: t.u32(),
                    edges_dropped: t.u32(),
                    samples_dropped: t.u32(),
                    overflows: t.u16(),
                    rx_bad_frames: t.u16(),
                    buffer_fill_pct: t.u8(),
                    state: t.u8(),
                });
                match m.encode_body(&mut body) {
                    Ok(n) => (m.msg_type(), n),
                    Err(_) => continue,
                }
            }
            9 => {
                // window extremes: extremes and sums drawn, most of them refused by the rules
                let cycles = u32::from(t.u8());
                let (hmin, lmin) = (u32::from(t.u16()), u32::from(t.u16()));
                let (hmax, lmax) = (hmin + u32::from(t.u8()), lmin + u32::from(t.u8()));
                let bins: Vec<u8> = if t.u8() & 1 == 1 {
                    cycles.to_le_bytes().to_vec()
                } else {
                    Vec::new()
                };
                let m = Message::Extremes(proto::ExtremesWindow {
                    channel: t.u8() % 10,
                    flags: t.u8() & 1,
                    start_tick: tick(&mut t),
                    window_ticks: t.u32(),
                    cycles,
                    high_min_ticks: hmin,
                    high_max_ticks: hmax,
                    low_min_ticks: lmin,
                    low_max_ticks: lmax,
                    period_min_ticks: hmin + lmin,
                    period_max_ticks: hmax + lmax,
                    high_sum_ticks: u64::from(cycles) * u64::from(hmin),
                    low_sum_ticks: u64::from(cycles) * u64::from(lmax),
                    bin_origin_ticks: t.u32(),
                    bin_width_ticks: t.u32(),
                    bins: &bins,
                });
                match m.encode_body(&mut body) {
                    Ok(n) => (m.msg_type(), n),
                    Err(_) => continue,
                }
            }
            10 => {
                let mut stamps = [0u8; 8 * 13];
                let phases: Vec<proto::ShortPhase> = (0..t.u8() % 9)
                    .map(|_| proto::ShortPhase {
                        tick: tick(&mut t),
                        length_ticks: u32::from(t.u8()),
                        high: t.u8() & 1 == 1,
                    })
                    .collect();
                let k = proto::Violations::stamp_bytes(&phases, &mut stamps);
                let m = Message::Violations(proto::Violations {
                    channel: t.u8() % 10,
                    flags: t.u8() & 1,
                    start_tick: tick(&mut t),
                    window_ticks: t.u32(),
                    high_threshold_ticks: u32::from(t.u16()),
                    low_threshold_ticks: u32::from(t.u16()),
                    high_short: u32::from(t.u8()),
                    low_short: u32::from(t.u8()),
                    stamps: &stamps[..k],
                });
                match m.encode_body(&mut body) {
                    Ok(n) => (m.msg_type(), n),
                    Err(_) => continue,
                }
            }
            6 => {
                // the last frame again (a duplicate on the link)
                feed.push(&last);
                continue;
            }
            7 => {
                seq = seq.wrapping_add(t.u16());
                continue;
            }
            _ => {
                let n = usize::from(t.u8());
                let raw: Vec<u8> = (0..n).map(|_| t.u8()).collect();
                feed.push(&raw);
                continue;
            }
        };
        if let Ok(len) = proto::encode_frame(msg_type, seq, &body[..n], &mut wire) {
            last = wire[..len].to_vec();
            feed.push(&last);
            seq = seq.wrapping_add(1);
        }
        if steps % 50 == 0 {
            let _ = feed.engine.snapshot(Window::Recent);
        }
    }
    let s = feed.engine.snapshot(Window::Session);
    let _ = feed.engine.snapshot(Window::Recent);
    let c = feed.counters();
    assert!(c.frames <= steps as u64 * 2 + c.bytes);
    drop(s);
}

/// The same edges through the per-edge path and the bulk path, in batches and with continuity
/// breaks the input chooses: both leave the same state, field by field.
pub fn clock_paths(data: &[u8]) {
    let mut t = Take(data);
    let tick_ns = [8.0, 62.5, 2.0, 1.0][usize::from(t.u8() % 4)];
    let mut cfg = ClockConfig::default();
    if t.u8() & 1 == 1 {
        cfg.glitch_ns = Some(f64::from(t.u8()));
    }
    let mut one = ClockState::new(cfg.clone(), tick_ns);
    let mut bulk = ClockState::new(cfg, tick_ns);
    let mut at = tick(&mut t);
    let period = u64::from(t.u16().max(2));
    let mut batches = 0;
    while !t.done() && batches < 64 {
        batches += 1;
        let first = t.u8() & 1 == 1;
        let len = usize::from(t.u8()) + 1;
        if t.u8() < 8 {
            one.break_continuity();
            bulk.break_continuity();
        }
        let mut ticks = Vec::with_capacity(len);
        for _ in 0..len {
            let b = t.u8();
            let d = match b {
                0 => u64::from(t.u32()),        // a stall
                1 => 1,                         // a glitch
                2 => return_backwards(&mut at), // a probe restart: time goes back
                _ => period / 2 + u64::from(b) % (period / 4 + 1),
            };
            let Some(next) = at.checked_add(d) else {
                break;
            };
            at = next;
            ticks.push(at);
        }
        for (k, &tk) in ticks.iter().enumerate() {
            one.edge(tk, first ^ (k % 2 == 1));
        }
        bulk.edges(&ticks, first);
        // the whole state is large to print: compared now and then, and at the end
        if batches % 16 == 0 {
            assert_eq!(format!("{one:?}"), format!("{bulk:?}"), "batch {batches}");
        }
    }
    assert_eq!(format!("{one:?}"), format!("{bulk:?}"), "at the end");
}

/// Move `at` back (a restart) and return a zero step.
fn return_backwards(at: &mut u64) -> u64 {
    *at /= 2;
    0
}

/// Any bytes as a recording: the header parser, then the chunk reader over everything after
/// it; it ends, and every damaged stretch is listed or counted.
pub fn recording_chunks(data: &[u8]) {
    let offset = match slackmeter_io::record::format::parse_header("fuzz.smrec", data) {
        Ok(p) => p.data_offset,
        Err(_) => 0,
    };
    let start = usize::try_from(offset)
        .unwrap_or(data.len())
        .min(data.len());
    let mut r =
        slackmeter_io::record::format::ChunkReader::new(Cursor::new(&data[start..]), offset);
    let mut chunks = 0u64;
    loop {
        match r.next_chunk() {
            Ok(Some(_)) => chunks += 1,
            Ok(None) => break,
            Err(_) => break,
        }
        assert!(chunks <= data.len() as u64, "more chunks than bytes");
    }
    let damage = r.take_damage();
    assert!(damage.len() <= slackmeter_io::record::format::MAX_DAMAGE_LISTED + 1);
}

/// Any text as a design file against the built-in library.
pub fn design_file(data: &[u8]) {
    // the built-in library is loaded once: fitting it each run would cost most of the time
    static LIB: std::sync::OnceLock<Library> = std::sync::OnceLock::new();
    let lib = LIB.get_or_init(Library::builtin);
    let text = String::from_utf8_lossy(data);
    // included files are not read: the bytes alone are the design
    let no_files = slackmeter_core::budget::design::NoIncludes;
    if let Ok(d) = Design::parse_with(Source::new("fuzz.toml", text.as_ref()), lib, &no_files) {
        // the supply wiring is read from the same text, and the power budget solved on it
        if let Ok(Some(w)) = slackmeter_core::power::Wiring::of(&d) {
            static DATA: std::sync::OnceLock<slackmeter_core::power::SupplyData> =
                std::sync::OnceLock::new();
            let data = DATA.get_or_init(slackmeter_core::power::SupplyData::builtin);
            let pt = slackmeter_core::power::PowerPoint {
                freq_hz: d.clock.freq_hz.unwrap_or(1e6),
                data_activity: 0.25,
                temp_c: d.operating.temp_c,
            };
            let _ = slackmeter_core::power::solve(&d, lib, data, &w, &pt);
        }
    }
}

/// Any text as a user part file, after the built-in library.
pub fn part_library(data: &[u8]) {
    let text = String::from_utf8_lossy(data);
    let _ = Library::from_sources(&[Source::new("fuzz-parts.toml", text.as_ref())]);
}

/// Any text as a KiCad netlist: read, imported against the built-in library (clock net "CLK"),
/// and the design it writes read back.
pub fn netlist(data: &[u8]) {
    static LIB: std::sync::OnceLock<Library> = std::sync::OnceLock::new();
    let lib = LIB.get_or_init(Library::builtin);
    let text = String::from_utf8_lossy(data);
    let Ok(n) = slackmeter_core::import::parse(&Source::new("fuzz.net", text.as_ref())) else {
        return;
    };
    let map = std::collections::BTreeMap::new();
    let o = slackmeter_core::import::Options {
        clock: "CLK",
        map: &map,
        name: "fuzz",
        source: "fuzz.net",
        sections: &[],
    };
    if let Ok(done) = slackmeter_core::import::import(&n, lib, &o) {
        let no_files = slackmeter_core::budget::design::NoIncludes;
        let _ = Design::parse_with(Source::new("fuzz.toml", done.design), lib, &no_files);
    }
}

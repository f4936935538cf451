//! A damaged link, end to end: `slackmeter sim --pty` → a proxy that flips bits in frames, drops
//! frames, duplicates them, cuts them short and inserts garbage, at three rates → `slackmeter
//! record` on the proxy's own pseudo-terminal. What the recording accepted is checked against
//! what the virtual probe sent and what the proxy did: no damaged frame accepted, every intact
//! frame kept, and the decoder's trust counters equal to the damage injected.

use std::collections::HashSet;
use std::io::{Read, Write};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use firmware_protocol::StreamDecoder;
use rand::{Rng, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use slackmeter::record::Recording;
use slackmeter::record::format::ChunkKind;
use slackmeter::sim::pty::PtyServer;

/// What the proxy did to one frame of the probe's stream.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Fate {
    Intact,
    Flipped,
    Dropped,
    Duplicated,
    Truncated,
    /// Garbage (a bad frame of its own) went in before it; the frame itself is intact.
    AfterGarbage,
}

/// One frame as forwarded: its wire bytes as the probe sent them, its fate, and where the
/// bytes the proxy wrote for it end in the forwarded stream.
struct Forwarded {
    wire: Vec<u8>,
    fate: Fate,
    end: usize,
}

fn tmpdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("slackmeter-corrupt-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Damage applied to frame `index` (the handshake's first frames pass untouched).
fn fate(r: &mut Xoshiro256PlusPlus, index: usize) -> Fate {
    if index < 40 {
        return Fate::Intact;
    }
    // the rate steps through 0.1 %, 1 % and 10 % of frames, 600 frames at a time
    let rate = [0.001, 0.01, 0.1][(index / 600) % 3];
    if !r.random_bool(rate) {
        return Fate::Intact;
    }
    match r.random_range(0..5) {
        0 => Fate::Flipped,
        1 => Fate::Dropped,
        2 => Fate::Duplicated,
        3 => Fate::Truncated,
        _ => Fate::AfterGarbage,
    }
}

/// The bytes the proxy writes for one frame (`wire` ends with its 0x00 delimiter).
fn damage(r: &mut Xoshiro256PlusPlus, wire: &[u8], f: Fate) -> Vec<u8> {
    let body = &wire[..wire.len() - 1];
    match f {
        Fate::Intact => wire.to_vec(),
        Fate::Dropped => Vec::new(),
        Fate::Duplicated => [wire, wire].concat(),
        Fate::Flipped => {
            let mut w = wire.to_vec();
            let i = r.random_range(0..body.len());
            // flip one bit, never making a delimiter (the frame stays one frame)
            let mut bit = 1u8 << r.random_range(0..8);
            if w[i] ^ bit == 0 {
                bit = if bit == 0x80 { 0x01 } else { bit << 1 };
            }
            w[i] ^= bit;
            w
        }
        Fate::Truncated => {
            let keep = r.random_range(1..body.len().max(2));
            let mut w = body[..keep.min(body.len())].to_vec();
            w.push(0);
            w
        }
        Fate::AfterGarbage => {
            let n = r.random_range(8..64);
            let mut w: Vec<u8> = (0..n).map(|_| r.random_range(1..=255u8)).collect();
            w.push(0);
            w.extend_from_slice(wire);
            w
        }
    }
}

/// The sequence number of a wire frame (decoded on its own).
fn seq_of(wire: &[u8]) -> Option<(u8, u16)> {
    let mut d = StreamDecoder::new();
    let mut out = None;
    d.push(wire, |f| out = Some((f.header.msg_type, f.header.seq)));
    out
}

fn wait_for_link(p: &Path) {
    let until = Instant::now() + Duration::from_secs(20);
    while std::fs::read_link(p).is_err() {
        assert!(Instant::now() < until, "no link at {}", p.display());
        std::thread::sleep(Duration::from_millis(20));
    }
}

#[test]
fn a_damaged_link_loses_only_what_was_damaged() {
    let dir = tmpdir("proxy");
    let probe_link = dir.join("probe");
    let mut sim = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["sim", "--pty", "--bursts", "2000/20ms", "--link"])
        .arg(&probe_link)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    wait_for_link(&probe_link);
    let mut to_probe = serialport::new(probe_link.to_string_lossy(), 1_000_000)
        .timeout(Duration::from_millis(5))
        .open()
        .expect("the virtual probe's port opens");
    let mut from_probe = to_probe.try_clone().unwrap();
    let proxy_link = dir.join("proxy");
    let mut server = PtyServer::open(Some(&proxy_link)).unwrap();
    let mut host_side = server.master().try_clone().unwrap();
    let stop = Arc::new(AtomicBool::new(false));

    // host → probe, untouched
    let up = {
        let stop = stop.clone();
        std::thread::spawn(move || {
            let mut b = [0u8; 512];
            while !stop.load(Ordering::Relaxed) {
                match host_side.read(&mut b) {
                    Ok(n) if n > 0 => to_probe.write_all(&b[..n]).unwrap(),
                    _ => std::thread::sleep(Duration::from_millis(2)),
                }
            }
        })
    };
    // probe → host, damaged frame by frame
    let down = {
        let stop = stop.clone();
        std::thread::spawn(move || {
            let mut r = Xoshiro256PlusPlus::seed_from_u64(0x5EED_F00D);
            let master = server.master();
            let mut frames: Vec<Forwarded> = Vec::new();
            let (mut partial, mut out, mut written) = (Vec::new(), Vec::new(), 0usize);
            let mut b = [0u8; 4096];
            while !stop.load(Ordering::Relaxed) {
                if let Ok(n) = from_probe.read(&mut b) {
                    for &x in &b[..n] {
                        partial.push(x);
                        if x == 0 {
                            let wire = std::mem::take(&mut partial);
                            let f = fate(&mut r, frames.len());
                            out.extend_from_slice(&damage(&mut r, &wire, f));
                            frames.push(Forwarded {
                                wire,
                                fate: f,
                                end: written + out.len(),
                            });
                        }
                    }
                }
                while !out.is_empty() {
                    match master.write(&out) {
                        Ok(n) if n > 0 => {
                            written += n;
                            out.drain(..n);
                        }
                        _ => break,
                    }
                }
            }
            (frames, server)
        })
    };

    let out = dir.join("damaged.smrec");
    let rec = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .arg("record")
        .arg(&proxy_link)
        .args(["--duration", "8s", "-o"])
        .arg(&out)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .output()
        .unwrap();
    stop.store(true, Ordering::Relaxed);
    up.join().unwrap();
    let (frames, _server) = down.join().unwrap();
    let _ = sim.kill();
    let _ = sim.wait();
    assert!(
        rec.status.success(),
        "{}",
        String::from_utf8_lossy(&rec.stderr)
    );

    // the bytes the recorder received, as its file holds them
    let mut file = Recording::open(&out).unwrap();
    let mut received = Vec::new();
    while let Some(c) = file.chunk_reader().next_chunk().unwrap() {
        if c.kind == ChunkKind::Data {
            received.extend_from_slice(&c.payload);
        }
    }
    let mut decoder = StreamDecoder::new();
    let mut accepted: Vec<Vec<u8>> = Vec::new();
    decoder.push(&received, |f| {
        let mut w = [0u8; firmware_protocol::MAX_WIRE];
        let n = firmware_protocol::encode_frame(f.header.msg_type, f.header.seq, f.body, &mut w)
            .unwrap();
        accepted.push(w[..n].to_vec());
    });
    let c = decoder.counters;

    // the frames whose forwarded bytes the recorder read in full
    let seen: Vec<&Forwarded> = frames.iter().filter(|f| f.end <= received.len()).collect();
    assert!(seen.len() > 2000, "only {} frames went through", seen.len());
    let sent: HashSet<&[u8]> = frames.iter().map(|f| f.wire.as_slice()).collect();
    // no damaged frame accepted: every accepted frame is one the probe sent, byte for byte
    for a in &accepted {
        assert!(
            sent.contains(a.as_slice()),
            "an accepted frame the probe never sent"
        );
    }
    // every intact frame kept, in order, once
    let kept: Vec<&[u8]> = seen
        .iter()
        .filter(|f| matches!(f.fate, Fate::Intact | Fate::Duplicated | Fate::AfterGarbage))
        .map(|f| f.wire.as_slice())
        .collect();
    let got: Vec<&[u8]> = accepted.iter().map(Vec::as_slice).collect();
    assert_eq!(got, kept, "intact frames kept, in order, once each");

    // trust counters against the damage injected
    let count = |fate: Fate| seen.iter().filter(|f| f.fate == fate).count() as u64;
    let bad = c.crc_errors + c.cobs_errors + c.runts + c.oversized + c.bad_version;
    let injected_bad = count(Fate::Flipped) + count(Fate::Truncated) + count(Fate::AfterGarbage);
    assert_eq!(bad, injected_bad, "bad frames: {c:?}");
    assert_eq!(c.duplicates, count(Fate::Duplicated), "{c:?}");
    // lost: the sequence numbers missing between kept frames (frames the virtual probe itself
    // dropped while the proxy lagged included, as the probe's numbering shows them)
    let mut expect: Option<u16> = None;
    let mut lost = 0u64;
    for w in &kept {
        let (ty, seq) = seq_of(w).unwrap();
        if let Some(e) = expect
            && ty != firmware_protocol::types::HELLO
        {
            lost += u64::from(seq.wrapping_sub(e));
        }
        expect = Some(seq.wrapping_add(1));
    }
    assert_eq!(c.lost_frames, lost, "{c:?}");
    assert_eq!(c.out_of_order, 0);
    let damaged = seen.iter().filter(|f| f.fate != Fate::Intact).count();
    assert!(damaged >= 30, "only {damaged} frames damaged");
    eprintln!(
        "frames through the proxy: {}, damaged {damaged} (flipped {}, dropped {}, duplicated {}, \
         cut short {}, garbage before {}); accepted {}, corrupted accepted 0, intact kept {}",
        seen.len(),
        count(Fate::Flipped),
        count(Fate::Dropped),
        count(Fate::Duplicated),
        count(Fate::Truncated),
        count(Fate::AfterGarbage),
        accepted.len(),
        kept.len()
    );
    let _ = std::fs::remove_dir_all(&dir);
}

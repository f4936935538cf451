//! Recordings survive what happens at a bench: cut-off files, damaged bytes, a killed recorder;
//! and a replay gives exactly what the live engine had.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

use slackmeter::measure::{EngineConfig, Feed, Window};
use slackmeter::record::format::{
    ChunkKind, ChunkReader, Header, encode_header, parse_header, write_all,
};
use slackmeter::record::{Recording, ReplayOptions};
use slackmeter::sim::{BenchModel, SimProbe};

fn tmp(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("slackmeter-rec-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// A small recording in memory: header plus data chunks of sim frames, a mark, a link event.
fn sample() -> (Vec<u8>, Vec<Vec<u8>>) {
    let mut p = SimProbe::new(BenchModel::scenario("sagging").unwrap(), vec![]);
    p.start();
    let mut chunks = Vec::new();
    let mut all = Vec::new();
    for i in 0..40 {
        p.run_until((i + 1) as f64 * 2e6);
        let b = std::mem::take(p.output());
        chunks.push((ChunkKind::Data, 1_000 + i as u64, b.clone()));
        all.push(b);
        if i == 20 {
            chunks.push((ChunkKind::Mark, 1_020, b"added 100 uF on board 19".to_vec()));
        }
    }
    chunks.push((
        ChunkKind::Link,
        2_000,
        br#"{"event":"lost","reason":"test"}"#.to_vec(),
    ));
    let mut file = Vec::new();
    write_all(
        &mut file,
        &Header {
            tool: "test".into(),
            source: "test".into(),
            ..Header::default()
        },
        &chunks,
    )
    .unwrap();
    (file, all)
}

fn read(bytes: &[u8]) -> (Vec<Vec<u8>>, Vec<slackmeter::record::format::Damage>) {
    let parsed = parse_header("mem", bytes).unwrap();
    let mut r = ChunkReader::new(&bytes[parsed.data_offset as usize..], parsed.data_offset);
    let mut data = Vec::new();
    while let Some(c) = r.next_chunk().unwrap() {
        if c.kind == ChunkKind::Data {
            data.push(c.payload);
        }
    }
    (data, r.damage)
}

#[test]
fn cut_at_200_random_offsets_recovers_every_complete_chunk() {
    let (file, written) = sample();
    let head = parse_header("mem", &file).unwrap().data_offset as usize;
    let mut x: u64 = 99;
    for _ in 0..200 {
        x = x.wrapping_mul(6364136223846793005).wrapping_add(1);
        let cut = head + (x >> 33) as usize % (file.len() - head);
        let (got, damage) = read(&file[..cut]);
        // every chunk read back is exactly one that was written, in order, a prefix of them
        assert!(got.len() <= written.len());
        assert_eq!(&written[..got.len()], &got[..], "cut at {cut}");
        // and every complete data chunk before the cut is there (layout: 21 data chunks, a
        // 24-byte mark, 19 data chunks, a link event; each chunk is payload + 22 bytes)
        let mut end = head;
        let mut complete = 0;
        for (i, w) in written.iter().enumerate() {
            end += w.len() + 22;
            if end <= cut {
                complete = i + 1;
            }
            if i == 20 {
                end += 24 + 22;
            }
        }
        assert_eq!(got.len(), complete, "cut at {cut}");
        let used: usize = head + got.iter().map(|g| g.len() + 22).sum::<usize>();
        if cut < file.len() && cut > used {
            assert!(
                damage.iter().any(|d| d.what.contains("cut off")),
                "the loss is reported at {cut}"
            );
        }
    }
}

#[test]
fn damaged_bytes_inside_a_chunk_lose_only_that_chunk() {
    let (mut file, written) = sample();
    let head = parse_header("mem", &file).unwrap().data_offset as usize;
    // flip a byte in the middle of the 5th chunk's payload
    let mut at = head;
    for w in &written[..4] {
        at += w.len() + 22;
    }
    file[at + 100] ^= 0x55;
    let (got, damage) = read(&file);
    assert_eq!(got.len(), written.len() - 1);
    assert_eq!(&got[..4], &written[..4]);
    assert_eq!(&got[4..], &written[5..]);
    assert!(
        damage
            .iter()
            .any(|d| d.what.contains("checksum") && d.offset == at as u64),
        "{damage:?}"
    );
}

#[test]
fn bad_files_get_specific_errors() {
    let dir = tmp("bad");
    let f = |name: &str, bytes: &[u8]| {
        let p = dir.join(name);
        std::fs::write(&p, bytes).unwrap();
        match Recording::open(&p) {
            Ok(_) => "opened".to_string(),
            Err(e) => e.to_string(),
        }
    };
    assert!(
        f("garbage.smrec", b"this is not a recording at all")
            .contains("not a slackmeter recording")
    );
    assert!(f("empty.smrec", b"").contains("not a slackmeter recording"));
    let mut future = encode_header(&Header::default());
    future[8] = 9;
    assert!(f("future.smrec", &future).contains("format version 9"));
    let mut broken = encode_header(&Header::default());
    let n = broken.len();
    broken[n - 6] ^= 1;
    assert!(f("header.smrec", &broken).contains("header"));
    let mut huge = encode_header(&Header::default());
    huge[10..14].copy_from_slice(&u32::MAX.to_le_bytes());
    assert!(f("huge.smrec", &huge).contains("cap"));
    assert_eq!(f("ok.smrec", &encode_header(&Header::default())), "opened");
}

fn wait_for(path: &Path) {
    let until = Instant::now() + Duration::from_secs(10);
    while std::fs::read_link(path).is_err() {
        assert!(Instant::now() < until);
        std::thread::sleep(Duration::from_millis(20));
    }
}

#[test]
fn a_killed_recorder_leaves_a_readable_file() {
    let dir = tmp("kill");
    let link = dir.join("probe");
    let mut sim = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["sim", "--pty", "--bursts", "2000/50ms", "--link"])
        .arg(&link)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    wait_for(&link);
    for (i, ms) in [700u64, 1300, 2100].into_iter().enumerate() {
        let out = dir.join(format!("run{i}.smrec"));
        let mut rec = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
            .arg("record")
            .arg(&link)
            .arg("-o")
            .arg(&out)
            .stdout(Stdio::null())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // the clock starts when the recorder has opened its file (process start-up and the
        // handshake take their own time on a loaded machine)
        let until = Instant::now() + Duration::from_secs(20);
        while !out.exists() && Instant::now() < until {
            std::thread::sleep(Duration::from_millis(10));
        }
        std::thread::sleep(Duration::from_millis(ms));
        rec.kill().unwrap(); // SIGKILL: no chance to flush
        rec.wait().unwrap();
        let mut r = Recording::open(&out).expect("header was flushed at start");
        let mut feed = Feed::new(EngineConfig::default());
        let sum = r
            .replay(&mut feed, ReplayOptions::default(), |_| {})
            .unwrap();
        let snap = feed.engine.snapshot(Window::Session);
        // the writer flushes at least every second: after 1.3 s some data must be there
        if ms >= 1300 {
            assert!(sum.data_bytes > 0, "kill after {ms} ms: no data");
            assert!(snap.probe.is_some(), "the probe's HELLO is in the file");
        }
        assert!(
            sum.damage.iter().all(|d| d.what.contains("cut off")),
            "{:?}",
            sum.damage
        );
    }
    sim.kill().unwrap();
    let _ = sim.wait();
}

#[test]
fn replay_equals_live() {
    let mut m = BenchModel::scenario("sagging").unwrap();
    m.glitch_rate_hz = 50.0;
    let mut p = SimProbe::new(m, vec![]);
    p.start();
    let dir = tmp("replay");
    let path = dir.join("live.smrec");
    let h = Header {
        tool: "test".into(),
        source: "test".into(),
        start_unix_ns: 1_000_000,
        ..Header::default()
    };
    let rec = slackmeter::record::Recorder::create(&path, &h).unwrap();
    let mut live = Feed::new(EngineConfig::default());
    for i in 0..300 {
        p.run_until((i + 1) as f64 * 1e6);
        let b = std::mem::take(p.output());
        live.push(&b);
        rec.data(1_000_000 + i as u64 * 1_000_000, b);
        if i == 150 {
            rec.mark(1_000_000 + 150_000_000, "half way");
        }
    }
    rec.finish().unwrap();
    let mut r = Recording::open(&path).unwrap();
    let mut feed = Feed::new(EngineConfig::default());
    let sum = r
        .replay(&mut feed, ReplayOptions::default(), |_| {})
        .unwrap();
    assert_eq!(
        feed.engine.snapshot(Window::Session),
        live.engine.snapshot(Window::Session)
    );
    assert_eq!(
        feed.engine.snapshot(Window::Recent),
        live.engine.snapshot(Window::Recent)
    );
    assert_eq!(sum.marks.len(), 1);
    assert_eq!(sum.marks[0].text, "half way");
    assert!(sum.damage.is_empty());
}

#[test]
fn record_refuses_a_missing_port_and_an_existing_file() {
    let bin = env!("CARGO_BIN_EXE_slackmeter");
    let out_path = tmp("missing-port").join("x.smrec");
    let _ = std::fs::remove_file(&out_path);
    let out = Command::new(bin)
        .args(["record", "/dev/does-not-exist-slackmeter", "-o"])
        .arg(&out_path)
        .args(["--duration", "5s"])
        .output()
        .expect("run");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(
        err.contains("not found") && err.contains("does-not-exist"),
        "{err}"
    );
    assert!(!out_path.exists(), "a header-only file was left behind");

    std::fs::write(&out_path, b"precious").expect("write");
    let out = Command::new(bin)
        .args(["record", "--sim", "-o"])
        .arg(&out_path)
        .args(["--duration", "1s"])
        .output()
        .expect("run");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("exists") && err.contains("--force"), "{err}");
    assert_eq!(std::fs::read(&out_path).expect("read"), b"precious");
    let _ = std::fs::remove_file(&out_path);
}

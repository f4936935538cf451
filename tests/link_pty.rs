//! The serial link against the virtual probe over real pseudo-terminals, and against devices
//! that are not probes.

use std::io::Write;
use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use firmware_protocol::{Configure, Message, StreamDecoder, params, types};
use serialport::SerialPort;
use slackmeter::link::{Link, LinkConfig, LinkError, LinkEvent};

fn spawn_sim(link: &Path) -> Child {
    let child = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["sim", "--pty", "--link"])
        .arg(link)
        .args(["--duration", "60s"])
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("sim starts");
    let until = Instant::now() + Duration::from_secs(10);
    while std::fs::read_link(link).is_err() {
        assert!(
            Instant::now() < until,
            "sim did not create {}",
            link.display()
        );
        std::thread::sleep(Duration::from_millis(20));
    }
    child
}

fn next(link: &mut Link, within: Duration) -> Option<LinkEvent> {
    let until = Instant::now() + within;
    while Instant::now() < until {
        match link.events.try_recv() {
            Ok(e) => return Some(e),
            Err(tokio::sync::mpsc::error::TryRecvError::Empty) => {
                std::thread::sleep(Duration::from_millis(5))
            }
            Err(_) => return None,
        }
    }
    None
}

fn tmpdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("slackmeter-{tag}-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

#[test]
fn handshake_configure_stream_and_reconnect_over_a_pty() {
    let dir = tmpdir("link");
    let path = dir.join("probe");
    let mut sim = spawn_sim(&path);
    let mut cfg = LinkConfig::new(&path);
    cfg.retry_every = Duration::from_millis(100);
    cfg.configure = [
        Configure {
            channel: params::PROBE,
            param: params::STATUS_INTERVAL_MS,
            value: 200,
        },
        Configure {
            channel: 77,
            param: params::ENABLE,
            value: 1,
        }, // no such channel: refused
    ]
    .map(Into::into)
    .to_vec();
    let mut link = Link::start(cfg, 1024);

    let mut decoder = StreamDecoder::new();
    let mut connected = None;
    let mut refused = Vec::new();
    let mut edge_frames = 0;
    let mut last_tick = 0u64;
    let mut status_frames = 0;
    let until = Instant::now() + Duration::from_secs(20);
    while (connected.is_none() || edge_frames < 40 || status_frames < 2) && Instant::now() < until {
        match next(&mut link, Duration::from_secs(5)) {
            Some(LinkEvent::Connected { probe, reconnects }) => {
                connected = Some((probe, reconnects))
            }
            Some(LinkEvent::Refused { what, reason }) => refused.push((what, reason)),
            Some(LinkEvent::Data { bytes, .. }) => {
                decoder.push(&bytes, |f| match f.header.msg_type {
                    types::EDGES => {
                        if let Ok(Message::Edges(e)) = Message::decode(&f) {
                            for t in e.ticks() {
                                assert!(t > last_tick, "edges in order");
                                last_tick = t;
                            }
                            edge_frames += 1;
                        }
                    }
                    types::STATUS => status_frames += 1,
                    _ => {}
                })
            }
            Some(LinkEvent::Failed(e)) => panic!("link failed: {e}"),
            Some(_) => {}
            None => break,
        }
    }
    let (probe, reconnects) = connected.expect("handshake completed");
    assert!(probe.firmware.starts_with("slackmeter-sim"));
    assert_eq!(reconnects, 0);
    assert!((probe.tick_ns - 8.0).abs() < 1e-9);
    assert!(
        probe
            .channels
            .iter()
            .any(|c| c.label == "VCC_FAR" && c.kind == slackmeter::probe::ChannelKind::Analog)
    );
    assert!(edge_frames >= 40, "{edge_frames} edge frames");
    assert!(status_frames >= 2, "status every 200 ms after CONFIGURE");
    assert_eq!(refused.len(), 1, "{refused:?}");
    assert!(refused[0].1.contains("no such channel"));
    assert_eq!(decoder.counters.rejected(), 0, "{:?}", decoder.counters);
    assert_eq!(decoder.counters.lost_frames, 0);

    // unplug: the probe process dies
    sim.kill().unwrap();
    sim.wait().unwrap();
    let mut lost = false;
    let until = Instant::now() + Duration::from_secs(10);
    while !lost && Instant::now() < until {
        if let Some(LinkEvent::Lost { .. }) = next(&mut link, Duration::from_secs(1)) {
            lost = true;
        }
    }
    assert!(lost, "loss of the device is reported");

    // plug back in: a new virtual probe behind the same path
    let mut sim2 = spawn_sim(&path);
    let mut back = None;
    let until = Instant::now() + Duration::from_secs(20);
    while back.is_none() && Instant::now() < until {
        match next(&mut link, Duration::from_secs(1)) {
            Some(LinkEvent::Connected { reconnects, .. }) => back = Some(reconnects),
            Some(LinkEvent::Failed(e)) => panic!("gave up instead of reconnecting: {e}"),
            _ => {}
        }
    }
    assert_eq!(back, Some(1), "reconnected once");
    link.stop();
    sim2.kill().unwrap();
    let _ = sim2.wait();
    let _ = std::fs::remove_dir_all(&dir);
}

fn failure_on(master_writes: Vec<u8>) -> LinkError {
    let (mut master, slave) = serialport::TTYPort::pair().expect("pty pair");
    let path = slave.name().expect("slave has a path");
    let writer = std::thread::spawn(move || {
        for _ in 0..30 {
            let _ = master.write_all(&master_writes);
            std::thread::sleep(Duration::from_millis(50));
        }
        master
    });
    let mut cfg = LinkConfig::new(&path);
    cfg.hello_timeout = Duration::from_millis(800);
    cfg.reconnect = false;
    let mut link = Link::start(cfg, 1024);
    let err = loop {
        match next(&mut link, Duration::from_secs(10)) {
            Some(LinkEvent::Failed(e)) => break e,
            Some(_) => {}
            None => panic!("no failure reported"),
        }
    };
    drop(slave);
    let _ = writer.join();
    err
}

#[test]
fn garbage_is_not_a_probe_and_says_what_it_saw() {
    match failure_on(b"hello world, 9600 baud noise\x13\x37".to_vec()) {
        LinkError::NotAProbe { seen, hint, .. } => {
            assert!(seen.contains("no valid frame"), "{seen}");
            assert!(
                seen.contains("68 65 6c 6c 6f"),
                "first bytes in hex: {seen}"
            );
            assert!(hint.contains("baud"), "{hint}");
        }
        other => panic!("{other:?}"),
    }
}

#[test]
fn a_probe_of_another_protocol_version_is_named() {
    // a well-formed frame (valid COBS and CRC) whose version byte is 2
    let mut raw = vec![2u8, types::HELLO, 0, 0, 9, 9];
    let crc = firmware_protocol::crc32(&raw);
    raw.extend_from_slice(&crc.to_le_bytes());
    let mut wire = vec![0u8; 64];
    let n = cobs::encode(&raw, &mut wire);
    wire.truncate(n);
    wire.push(0);
    match failure_on(wire) {
        LinkError::Version { probe, host, .. } => assert_eq!((probe, host), (2, 1)),
        other => panic!("{other:?}"),
    }
}

#[test]
fn a_missing_port_lists_what_there_is() {
    let mut cfg = LinkConfig::new("/dev/does-not-exist-slackmeter");
    cfg.reconnect = false;
    let mut link = Link::start(cfg, 16);
    loop {
        match next(&mut link, Duration::from_secs(5)) {
            Some(LinkEvent::Failed(LinkError::NotFound { path, hint })) => {
                assert!(path.contains("does-not-exist"));
                assert!(
                    hint.contains("ports") || hint.contains("sim --pty"),
                    "{hint}"
                );
                break;
            }
            Some(LinkEvent::Failed(e)) => panic!("{e:?}"),
            Some(_) => {}
            None => panic!("no failure"),
        }
    }
}

//! A recording started in the middle of a session (what the live view's `R` key does, through
//! the same session call) reports the clock and the rails like one started with the session:
//! it begins with the probe's last self-description, and the join counts no lost frames, no
//! damaged frames and no reconnect.

use std::path::{Path, PathBuf};
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use slackmeter::link::LinkConfig;
use slackmeter::session::{self, Event, Next, Pace, Session, SimSpec, SourceSpec};
use slackmeter::sim::BenchModel;

fn tmpdir(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("slackmeter-join-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn report(path: &Path) -> serde_json::Value {
    let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["report", "--json", "--no-design"])
        .arg(path)
        .output()
        .expect("report runs");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(0), "{err}");
    serde_json::from_slice(&out.stdout).expect("JSON")
}

fn rail_names(v: &serde_json::Value) -> Vec<String> {
    v["rails"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["name"].as_str().unwrap().to_string())
        .collect()
}

/// The figures a joined recording must share with one made from the start.
fn same_story(from_start: &serde_json::Value, joined: &serde_json::Value, freq_hz: f64) {
    for v in [from_start, joined] {
        let f = v["clock"]["frequency_hz"].as_f64().expect("a clock");
        assert!((f / freq_hz - 1.0).abs() < 1e-4, "{f} Hz");
        let d = v["clock"]["duty"].as_f64().expect("a duty");
        assert!((d - 0.5).abs() < 0.01, "duty {d}");
        // frames the virtual probe could not write while a loaded machine's reader lagged are
        // lost by the probe, not by the join: not checked here
        assert_eq!(v["crc_errors"], 0);
        assert_eq!(v["trust"]["other_rejects"], 0, "no frame cut in two");
        assert_eq!(v["trust"]["reconnects"], 0);
    }
    assert_eq!(rail_names(joined), rail_names(from_start));
    assert!(!rail_names(joined).is_empty());
    let links = joined["links"].as_array().unwrap();
    assert!(
        links.iter().any(|l| l["event"]["event"] == "joined"),
        "{links:?}"
    );
}

/// Events until `done` says so (fails after `secs`).
fn run_until(s: &mut Session, secs: u64, mut done: impl FnMut(&Session, &Event) -> bool) {
    let until = Instant::now() + Duration::from_secs(secs);
    loop {
        assert!(Instant::now() < until, "the session never got there");
        match s.next_within(Duration::from_millis(50)) {
            Next::Event(Event::Failed(e)) => panic!("{e}"),
            Next::Event(e) => {
                if done(s, &e) {
                    return;
                }
            }
            Next::Idle => {}
            Next::Ended => panic!("the source ended"),
        }
    }
}

#[test]
fn a_recording_started_mid_session_reports_its_clock_and_rails() {
    let dir = tmpdir("sim");
    let spec = || {
        SourceSpec::Sim(Box::new(SimSpec {
            model: BenchModel::scenario("steady").unwrap(),
            notes: vec![],
            pace: Pace::Fast,
            duration_ns: Some(3e9),
        }))
    };
    let header = || session::header("virtual probe", vec![], None, None);
    // from the start
    let start = dir.join("start.smrec");
    let mut s = Session::start(spec(), header(), None).unwrap();
    s.start_recording(&start).unwrap();
    run_until(&mut s, 120, |_, e| matches!(e, Event::End));
    s.stop_recording().unwrap().unwrap();
    // from one second in, as the R key starts one
    let joined = dir.join("joined.smrec");
    let mut s = Session::start(spec(), header(), None).unwrap();
    run_until(&mut s, 120, |s, _| s.elapsed_s() >= 1.0);
    s.start_recording(&joined).unwrap();
    run_until(&mut s, 120, |_, e| matches!(e, Event::End));
    let (_, counts) = s.stop_recording().unwrap().unwrap();
    assert!(counts.data_bytes > 0);
    let (a, b) = (report(&start), report(&joined));
    same_story(&a, &b, 2e6);
    let secs = |v: &serde_json::Value| v["duration_s"].as_f64().unwrap();
    assert!(secs(&b) < secs(&a) - 0.5, "{} vs {}", secs(&b), secs(&a));
    let _ = std::fs::remove_dir_all(&dir);
}

fn spawn_sim(link: &Path) -> Child {
    let child = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["sim", "--pty", "--duration", "60s", "--link"])
        .arg(link)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("sim starts");
    let until = Instant::now() + Duration::from_secs(10);
    while std::fs::read_link(link).is_err() {
        assert!(Instant::now() < until, "sim did not create its link");
        std::thread::sleep(Duration::from_millis(20));
    }
    child
}

/// Over a real pseudo-terminal, where reads end anywhere inside a frame.
#[test]
fn a_recording_joined_on_a_port_starts_at_a_frame_boundary() {
    let dir = tmpdir("pty");
    let link = dir.join("probe");
    let mut sim = spawn_sim(&link);
    let header = session::header("probe", vec![], None, None);
    let mut s = Session::start(SourceSpec::Port(LinkConfig::new(&link)), header, None).unwrap();
    let start = dir.join("start.smrec");
    s.start_recording(&start).unwrap();
    let mut connected = None;
    run_until(&mut s, 30, |s, e| {
        if matches!(e, Event::Connected { .. }) {
            connected = Some(s.elapsed_s());
        }
        connected.is_some_and(|t| s.elapsed_s() > t + 1.5)
    });
    s.stop_recording().unwrap().unwrap();
    let joined = dir.join("joined.smrec");
    s.start_recording(&joined).unwrap();
    let t = s.elapsed_s();
    run_until(&mut s, 30, |s, _| s.elapsed_s() > t + 1.5);
    s.stop_recording().unwrap().unwrap();
    drop(s);
    sim.kill().unwrap();
    let _ = sim.wait();
    same_story(&report(&start), &report(&joined), 2e6);
    let _ = std::fs::remove_dir_all(&dir);
}

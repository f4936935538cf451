//! One exit code per situation, the same for every command: a table of command lines run as a
//! user runs them (real process, real files), each with the code it must end with.
//! 0 fine, 1 runtime failure (I/O, device), 2 bad command line or input file, 3 margin broken.

use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn tmp(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("slackmeter-exit-{tag}-{}", std::process::id()));
    std::fs::create_dir_all(&d).unwrap();
    d
}

/// Run with a deadline (a command that hangs fails the test instead of blocking it).
fn code(args: &[String]) -> (i32, String) {
    let mut child = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(args)
        .env("NO_COLOR", "1")
        .env_remove("SLACKMETER_PARTS")
        .stdin(Stdio::null())
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary runs");
    let until = Instant::now() + Duration::from_secs(60);
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            let mut err = String::new();
            use std::io::Read;
            child
                .stderr
                .take()
                .unwrap()
                .read_to_string(&mut err)
                .unwrap();
            return (status.code().unwrap_or(-1), err);
        }
        if Instant::now() > until {
            let _ = child.kill();
            panic!("{args:?} did not end within 60 s");
        }
        std::thread::sleep(Duration::from_millis(20));
    }
}

fn s(p: &Path) -> String {
    p.display().to_string()
}

#[test]
fn every_situation_has_one_code_for_every_command() {
    let dir = tmp("table");
    let missing_port = "/dev/slackmeter-no-such-port".to_string();
    let missing_file = s(&dir.join("no-such-file"));
    let bad_design = s(&root().join("tests/designs/bad/03-unknown-part.toml"));
    let not_a_recording = s(&root().join("Cargo.toml"));
    let no_supply = s(&root().join("tests/designs/worked-example.toml"));
    let steady = s(&root().join("recordings/larkspur-steady.smrec"));
    let sweep = s(&root().join("recordings/larkspur-sweep.smrec"));
    let no_dir = s(&dir.join("no-such-dir").join("out"));
    let out = |n: &str| s(&dir.join(n));
    std::fs::write(dir.join("precious"), b"keep me").unwrap();
    let copy = out("copy.smrec");
    std::fs::copy(&steady, &copy).unwrap();
    #[rustfmt::skip]
    let table: Vec<(&str, Vec<String>, i32)> = vec![
        // a port with no device: a mistyped argument
        ("missing port", vec!["listen".into(), missing_port.clone(), "--duration".into(), "5s".into()], 2),
        ("missing port", vec!["record".into(), missing_port.clone(), "-o".into(), out("p.smrec")], 2),
        ("missing port", vec!["watch".into(), missing_port.clone()], 2),
        // a path that is not a serial device: refused at once, never retried
        ("not serial", vec!["listen".into(), "/dev/null".into(), "--duration".into(), "30s".into()], 2),
        ("not serial", vec!["record".into(), "/dev/null".into(), "-o".into(), out("n.smrec")], 2),
        ("not serial", vec!["record".into(), s(&dir), "-o".into(), out("n.smrec")], 2),
        ("not serial", vec!["record".into(), not_a_recording.clone(), "-o".into(), out("n.smrec")], 2),
        ("not serial", vec!["listen".into(), not_a_recording.clone(), "--duration".into(), "30s".into()], 2),
        // --link over something a virtual probe did not make
        ("link exists", vec!["sim".into(), "--pty".into(), "--link".into(), out("precious")], 2),
        // an input file that is not there
        ("missing file", vec!["report".into(), missing_file.clone()], 2),
        ("missing file", vec!["export".into(), missing_file.clone(), "--csv".into(), out("x.csv")], 2),
        ("missing file", vec!["replay".into(), missing_file.clone()], 2),
        ("missing file", vec!["budget".into(), missing_file.clone()], 2),
        ("missing file", vec!["budget".into(), "--recording".into(), missing_file.clone()], 2),
        ("missing file", vec!["failures".into(), missing_file.clone()], 2),
        ("missing file", vec!["parts".into(), "--parts".into(), missing_file.clone()], 2),
        ("missing file", vec!["power".into(), missing_file.clone()], 2),
        ("missing file", vec!["check".into(), missing_file.clone()], 2),
        // a design that does not load
        ("bad design", vec!["budget".into(), bad_design.clone()], 2),
        ("bad design", vec!["power".into(), bad_design.clone()], 2),
        ("bad design", vec!["check".into(), bad_design.clone()], 2),
        ("bad design", vec!["power".into(), no_supply.clone()], 2),
        ("bad design", vec!["budget".into(), no_supply.clone(), "--rails".into(), "predicted".into()], 2),
        // a device that never ends is refused after a bounded read
        ("bad design", vec!["budget".into(), "/dev/zero".into()], 2),
        ("bad design", vec!["report".into(), steady.clone(), "--design".into(), bad_design.clone()], 2),
        ("bad design", vec!["watch".into(), "--sim".into(), "--design".into(), bad_design.clone()], 2),
        ("bad design", vec!["replay".into(), steady.clone(), "--design".into(), bad_design.clone()], 2),
        ("bad design", vec!["failures".into(), sweep.clone(), "--design".into(), bad_design.clone()], 2),
        ("bad design", vec!["sim".into(), "--fault-on-typ".into(), "--design".into(), bad_design.clone(), "--out".into(), out("s.bin")], 2),
        ("bad design", vec!["record".into(), "--sim".into(), "--design".into(), bad_design.clone(), "-o".into(), out("d.smrec")], 2),
        // an output that is an input, or a file that is there already
        ("output is input", vec!["export".into(), copy.clone(), "--csv".into(), copy.clone()], 2),
        ("output is input", vec!["export".into(), copy.clone(), "--vcd".into(), copy.clone(), "--replace".into()], 2),
        ("output exists", vec!["export".into(), copy.clone(), "--csv".into(), out("precious")], 2),
        ("output exists", vec!["sim".into(), "--out".into(), out("precious"), "--duration".into(), "10ms".into()], 2),
        // a file that is not a recording
        ("bad recording", vec!["report".into(), not_a_recording.clone()], 2),
        ("bad recording", vec!["export".into(), not_a_recording.clone(), "--vcd".into(), out("x.vcd")], 2),
        ("bad recording", vec!["replay".into(), not_a_recording.clone()], 2),
        ("bad recording", vec!["failures".into(), not_a_recording.clone()], 2),
        ("bad recording", vec!["budget".into(), "--recording".into(), not_a_recording.clone()], 2),
        // the analysis ran and the clock does not fit the worst-case budget
        ("margin broken", vec!["report".into(), sweep.clone()], 3),
        ("margin broken", vec!["budget".into(), "--freq".into(), "3MHz".into()], 3),
        ("margin broken", vec!["budget".into(), "--recording".into(), sweep.clone()], 3),
        // the system refused (the input was fine)
        ("cannot write", vec!["export".into(), steady.clone(), "--csv".into(), no_dir.clone()], 1),
        ("cannot write", vec!["sim".into(), "--out".into(), no_dir.clone(), "--duration".into(), "10ms".into()], 1),
        ("cannot write", vec!["report".into(), steady.clone(), "--plots".into(), s(Path::new("/proc/slackmeter"))], 1),
        // fine
        ("fine", vec!["report".into(), steady.clone()], 0),
        ("fine", vec!["budget".into()], 0),
        ("fine", vec!["power".into()], 0),
        ("fine", vec!["check".into()], 0),
        ("fine", vec!["budget".into(), "--rails".into(), "predicted".into()], 0),
        ("fine", vec!["budget".into(), "--help".into()], 0),
    ];
    let mut wrong = Vec::new();
    for (situation, args, want) in &table {
        let (got, err) = code(args);
        if got != *want {
            wrong.push(format!(
                "{situation}: {args:?} exited {got}, not {want}:\n{err}"
            ));
        }
    }
    // a flag no command has: the command line is bad, whatever the command
    for cmd in [
        "budget", "check", "parts", "power", "sim", "ports", "listen", "record", "report",
        "export", "failures", "watch", "replay",
    ] {
        let (got, err) = code(&[cmd.into(), "--no-such-flag".into()]);
        if got != 2 {
            wrong.push(format!("bad flag: {cmd} exited {got}, not 2:\n{err}"));
        }
    }
    assert!(
        !dir.join("p.smrec").exists(),
        "record on a missing port leaves no file"
    );
    assert!(
        !dir.join("n.smrec").exists(),
        "record on something that is not a port leaves no file"
    );
    assert_eq!(std::fs::read(dir.join("precious")).unwrap(), b"keep me");
    assert_eq!(
        std::fs::read(&copy).unwrap(),
        std::fs::read(&steady).unwrap(),
        "the recording is not written over"
    );
    let (_, err) = code(&[
        "record".into(),
        "/dev/null".into(),
        "-o".into(),
        out("n.smrec"),
    ]);
    assert!(err.contains("not a serial device"), "{err}");
    let _ = std::fs::remove_dir_all(&dir);
    assert!(wrong.is_empty(), "\n{}", wrong.join("\n"));
}

/// A recorder whose file cannot grow stops at once with a runtime failure, saying why, and
/// leaves what it wrote readable.
#[test]
fn a_failed_recorder_stops_record_at_once() {
    let dir = tmp("full");
    let path = dir.join("full.smrec");
    let _ = std::fs::remove_file(&path);
    // the file-size limit makes writes past 256 KiB fail (EFBIG) once SIGXFSZ is ignored
    let script = format!(
        "ulimit -f 512; trap '' XFSZ; exec '{}' record --sim --fast --duration 3600s -o '{}'",
        env!("CARGO_BIN_EXE_slackmeter"),
        path.display()
    );
    let started = Instant::now();
    let out = Command::new("sh")
        .args(["-c", &script])
        .output()
        .expect("sh runs");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(1), "{err}");
    assert!(
        err.contains("recording stopped") && err.contains("cannot write"),
        "{err}"
    );
    assert!(
        started.elapsed() < Duration::from_secs(60),
        "stopped at the failure, not after the hour asked for"
    );
    let mut rec = slackmeter::record::Recording::open(&path).expect("the header is intact");
    let mut feed = slackmeter::measure::Feed::new(Default::default());
    let sum = rec
        .replay(&mut feed, Default::default(), |_| {})
        .expect("what was written reads back");
    assert!(sum.data_bytes > 0);
    let _ = std::fs::remove_dir_all(&dir);
}

/// `watch --record` onto an existing file is refused before the view opens, as bad input.
#[test]
fn watch_refuses_an_existing_record_file_before_the_view() {
    let d = tmp("watch-record");
    let old = d.join("old.smrec");
    std::fs::write(&old, b"keep me").unwrap();
    let (c, err) = code(&["watch".into(), "--sim".into(), "--record".into(), s(&old)]);
    assert_eq!(c, 2, "{err}");
    assert!(err.contains("the file exists"), "{err}");
    assert_eq!(std::fs::read(&old).unwrap(), b"keep me");
    let (c, err) = code(&[
        "watch".into(),
        "--sim".into(),
        "--record-dir".into(),
        s(&d.join("no-such-folder")),
    ]);
    assert_eq!(c, 2, "{err}");
    assert!(err.contains("no such folder"), "{err}");
}

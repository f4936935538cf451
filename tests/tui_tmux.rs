//! The live view in a real terminal: tmux runs `slackmeter watch` against `slackmeter sim --pty`,
//! send-keys drives it, capture-pane reads the screen. The link is cut and restored meanwhile.

use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

fn tmux(args: &[&str]) -> String {
    let out = Command::new("tmux").args(args).output().expect("tmux runs");
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn sim(link: &Path) -> Child {
    let c = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .args(["sim", "--pty", "--bursts", "4000/50ms", "--link"])
        .arg(link)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let until = Instant::now() + Duration::from_secs(10);
    while std::fs::read_link(link).is_err() {
        assert!(Instant::now() < until, "sim started");
        std::thread::sleep(Duration::from_millis(20));
    }
    c
}

/// Ends the probes and the tmux server however the test ends (a failed assertion included).
struct Cleanup {
    session: String,
    probes: Vec<Child>,
}

impl Drop for Cleanup {
    fn drop(&mut self) {
        for p in &mut self.probes {
            let _ = p.kill();
            let _ = p.wait();
        }
        tmux(&["-L", &self.session, "kill-server"]);
    }
}

/// The screen of pane `w` on tmux server `sock` once it shows `what` (fails after `secs`).
fn wait_for(sock: &str, what: &str, secs: u64) -> String {
    let until = Instant::now() + Duration::from_secs(secs);
    loop {
        let screen = tmux(&["-L", sock, "capture-pane", "-p", "-t", "w"]);
        if screen.contains(what) {
            return screen;
        }
        assert!(
            Instant::now() < until,
            "screen never showed {what:?}:\n{screen}"
        );
        std::thread::sleep(Duration::from_millis(100));
    }
}

#[test]
fn watch_in_tmux_mark_freeze_lose_the_link_and_quit() {
    if Command::new("tmux").arg("-V").output().is_err() {
        eprintln!("tmux is not installed: skipped (CI installs it)");
        return;
    }
    let dir = std::env::temp_dir().join(format!("slackmeter-tmux-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let link = dir.join("probe");
    let session = format!("slackmeter-test-{}", std::process::id());
    let mut guard = Cleanup {
        session: session.clone(),
        probes: vec![sim(&link)],
    };
    let cmd = format!(
        "{} watch {} ; sleep 2",
        env!("CARGO_BIN_EXE_slackmeter"),
        link.display()
    );
    tmux(&["-L", &session, "kill-server"]);
    let sock = ["-L", session.as_str()];
    let t = |a: &[&str]| {
        let mut v: Vec<&str> = sock.to_vec();
        v.extend_from_slice(a);
        tmux(&v)
    };
    t(&["new-session", "-d", "-s", "w", "-x", "80", "-y", "24", &cmd]);
    let cap = |what: &str, secs| wait_for(&session, what, secs);
    // at 80×24: the measured frequency, every phase's slack and the verdict
    cap("STREAMING", 20);
    let screen = cap("MHz ±", 20);
    for what in [
        "frequency  ",
        "STREAMING",
        "recent 10 s",
        "worst high",
        "slack against Larkspur-8",
        "verdict:",
        "HEARTBEAT",
    ] {
        assert!(screen.contains(what), "{what} at 80×24:\n{screen}");
    }
    for phase in ["low ", "high ", "period "] {
        assert!(
            screen.lines().any(|l| l.starts_with(&format!("│{phase}"))),
            "{phase}at 80×24:\n{screen}"
        );
    }
    // a mark
    t(&["send-keys", "-t", "w", "m"]);
    t(&["send-keys", "-t", "w", "-l", "added decoupling"]);
    t(&["send-keys", "-t", "w", "Enter"]);
    cap("mark: added decoupling", 5);
    // freeze the figures
    t(&["send-keys", "-t", "w", " "]);
    cap("FROZEN", 5);
    t(&["send-keys", "-t", "w", " "]);
    // cut the link: the probe goes away
    guard.probes[0].kill().unwrap();
    guard.probes[0].wait().unwrap();
    cap("LINK LOST", 15);
    // and back
    guard.probes.push(sim(&link));
    cap("link back", 25);
    cap("STREAMING", 5);
    // quit restores the terminal and the program ends
    t(&["send-keys", "-t", "w", "q"]);
    std::thread::sleep(Duration::from_millis(800));
    let after = t(&["capture-pane", "-p", "-t", "w"]);
    assert!(
        !after.contains("slack against"),
        "the view is gone after q:\n{after}"
    );
    drop(guard);
    let _ = wait_for;
}

/// `R` in the live view: the --record file stops, a new one starts in the middle of the
/// session; both report the clock and the rails.
#[test]
fn r_starts_a_recording_mid_session_that_reports_like_record() {
    if Command::new("tmux").arg("-V").output().is_err() {
        eprintln!("tmux is not installed: skipped (CI installs it)");
        return;
    }
    let dir = std::env::temp_dir().join(format!("slackmeter-tmux-r-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&dir);
    std::fs::create_dir_all(&dir).unwrap();
    let session = format!("slackmeter-test-r-{}", std::process::id());
    let guard = Cleanup {
        session: session.clone(),
        probes: vec![],
    };
    let cmd = format!(
        "{} watch --sim --no-design --record start.smrec ; sleep 2",
        env!("CARGO_BIN_EXE_slackmeter")
    );
    let dir_s = dir.display().to_string();
    let t = |a: &[&str]| {
        let mut v = vec!["-L", session.as_str()];
        v.extend_from_slice(a);
        tmux(&v)
    };
    t(&[
        "new-session",
        "-d",
        "-s",
        "w",
        "-c",
        &dir_s,
        "-x",
        "120",
        "-y",
        "34",
        &cmd,
    ]);
    let cap = |what: &str, secs| wait_for(&session, what, secs);
    cap("2.000 MHz", 20);
    cap("REC start.smrec", 5);
    t(&["send-keys", "-t", "w", "R"]);
    cap("recording stopped", 5);
    std::thread::sleep(Duration::from_millis(300));
    // R asks for the file: the default is the local date and time
    t(&["send-keys", "-t", "w", "R"]);
    cap("record to file", 5);
    t(&["send-keys", "-t", "w", "Enter"]);
    cap("REC slackmeter-", 5);
    std::thread::sleep(Duration::from_millis(2500));
    t(&["send-keys", "-t", "w", "R"]);
    std::thread::sleep(Duration::from_millis(800));
    let screen = t(&["capture-pane", "-p", "-t", "w"]);
    t(&["send-keys", "-t", "w", "q"]);
    // on quit: where the recordings went
    let after = cap("recorded slackmeter-", 5);
    assert!(after.contains("recorded start.smrec"), "{after}");
    drop(guard);
    let joined: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| {
            p.file_name()
                .unwrap()
                .to_string_lossy()
                .starts_with("slackmeter-")
        })
        .collect();
    assert_eq!(joined.len(), 1, "{joined:?}\n{screen}");
    let report = |p: &Path| -> serde_json::Value {
        let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
            .args(["report", "--json"])
            .arg(p)
            .output()
            .unwrap();
        assert_eq!(
            out.status.code(),
            Some(0),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        serde_json::from_slice(&out.stdout).unwrap()
    };
    let a = report(&dir.join("start.smrec"));
    let b = report(&joined[0]);
    for v in [&a, &b] {
        let f = v["clock"]["frequency_hz"].as_f64().expect("a clock");
        assert!((f / 2e6 - 1.0).abs() < 1e-4, "{f}");
        assert!(v["clock"]["duty"].as_f64().is_some());
        assert_eq!(v["lost_frames"], 0);
        assert_eq!(v["trust"]["other_rejects"], 0);
    }
    assert_eq!(a["rails"].as_array().unwrap().len(), 3);
    assert_eq!(
        a["rails"].as_array().unwrap().len(),
        b["rails"].as_array().unwrap().len()
    );
    let _ = std::fs::remove_dir_all(&dir);
}

//! One behaviour for every command, checked on the real binary: a closed pipe ends quietly,
//! the live view without a terminal names the alternatives, one overwrite rule (`--force`),
//! `-` for standard output, text wrapped to 100 columns off a terminal, help that reads clearly,
//! messages without internal codes. Rules of the project's own, no outside source.

use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn steady() -> String {
    root()
        .join("recordings/larkspur-steady.smrec")
        .display()
        .to_string()
}

fn tmp(tag: &str) -> PathBuf {
    let d = std::env::temp_dir().join(format!("slackmeter-cli-{tag}-{}", std::process::id()));
    let _ = std::fs::remove_dir_all(&d);
    std::fs::create_dir_all(&d).unwrap();
    d
}

fn bin() -> Command {
    let mut c = Command::new(env!("CARGO_BIN_EXE_slackmeter"));
    c.env("NO_COLOR", "1")
        .env_remove("SLACKMETER_PARTS")
        .env_remove("COLUMNS")
        .stdin(Stdio::null());
    c
}

/// Run in `dir` with standard output and error captured (a pipe: no terminal).
fn run_in(dir: &Path, args: &[&str]) -> Output {
    bin()
        .current_dir(dir)
        .args(args)
        .output()
        .expect("binary runs")
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

/// Read `keep` bytes of the command's standard output, then close the pipe, as `| head -c`.
fn closed_early(args: &[&str], keep: usize) -> (Option<i32>, String) {
    let mut child = bin()
        .args(args)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("binary runs");
    let mut out = child.stdout.take().unwrap();
    let mut buf = vec![0u8; keep];
    let _ = out.read_exact(&mut buf);
    drop(out);
    let mut err = String::new();
    child
        .stderr
        .take()
        .unwrap()
        .read_to_string(&mut err)
        .unwrap();
    (child.wait().unwrap().code(), err)
}

#[test]
fn a_closed_pipe_ends_quietly_with_exit_0() {
    let rec = steady();
    for args in [
        vec!["report", "--json", rec.as_str()],
        vec!["report", rec.as_str()],
        vec!["parts"],
        vec!["budget"],
        vec!["budget", "--json"],
        vec!["export", rec.as_str(), "--csv", "-"],
    ] {
        let (code, err) = closed_early(&args, 16);
        assert_eq!(code, Some(0), "{args:?}: {err}");
        assert_eq!(err, "", "{args:?}");
    }
}

#[test]
fn the_live_view_without_a_terminal_names_the_alternatives() {
    let d = tmp("view");
    let o = run_in(&d, &["watch", "--sim"]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("slackmeter record") && err.contains("slackmeter listen"),
        "{err}"
    );
    assert!(!err.contains("panicked"), "{err}");
    // replay: its alternatives, and --speed takes a trailing x
    let o = run_in(&d, &["replay", "--speed", "2x", &steady()]);
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{err}");
    assert!(
        err.contains("needs a terminal") && err.contains("slackmeter report"),
        "{err}"
    );
    let o = run_in(&d, &["replay", "--speed", "fast", &steady()]);
    assert!(stderr(&o).contains("not a speed"), "{}", stderr(&o));
}

#[test]
fn every_output_refuses_an_existing_file_unless_forced() {
    let d = tmp("force");
    let rec = steady();
    std::fs::write(d.join("old"), b"mine").unwrap();
    let cases: [&[&str]; 3] = [
        &["export", &rec, "--csv", "old"],
        &["sim", "--out", "old", "--duration", "0.1s"],
        &[
            "record",
            "--sim",
            "--fast",
            "--duration",
            "0.2s",
            "-o",
            "old",
        ],
    ];
    for args in cases {
        let o = run_in(&d, args);
        let err = stderr(&o);
        assert_eq!(o.status.code(), Some(2), "{args:?}: {err}");
        assert!(
            err.contains("exists") && err.contains("--force"),
            "{args:?}: {err}"
        );
        assert_eq!(std::fs::read(d.join("old")).unwrap(), b"mine", "{args:?}");
    }
    for args in cases {
        let mut forced = args.to_vec();
        forced.push("--force");
        let o = run_in(&d, &forced);
        assert_eq!(o.status.code(), Some(0), "{forced:?}: {}", stderr(&o));
        assert_ne!(std::fs::read(d.join("old")).unwrap(), b"mine", "{forced:?}");
        std::fs::write(d.join("old"), b"mine").unwrap();
    }
    // the earlier spelling still works, unlisted
    let o = run_in(&d, &["export", &rec, "--csv", "old", "--replace"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    let help = String::from_utf8_lossy(&run_in(&d, &["export", "--help"]).stdout).into_owned();
    assert!(
        help.contains("--force") && !help.contains("--replace"),
        "{help}"
    );
    // plots: a folder that holds files
    std::fs::create_dir_all(d.join("plots")).unwrap();
    std::fs::write(d.join("plots/notes.txt"), b"mine").unwrap();
    let o = run_in(&d, &["report", &rec, "--plots", "plots"]);
    assert_eq!(o.status.code(), Some(2), "{}", stderr(&o));
    assert!(stderr(&o).contains("--force"), "{}", stderr(&o));
    let o = run_in(&d, &["report", &rec, "--plots", "plots", "--force"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert_eq!(std::fs::read(d.join("plots/notes.txt")).unwrap(), b"mine");
}

#[test]
fn a_dash_is_standard_output_never_a_file() {
    let d = tmp("dash");
    let o = run_in(&d, &["export", &steady(), "--csv", "-"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(o.stdout.starts_with(b"time_s,channel,label,kind,value"));
    assert!(!d.join("-").exists());
    assert_eq!(stderr(&o), "", "no 'wrote -' line");
}

#[test]
fn text_output_fits_100_columns_off_a_terminal() {
    let d = tmp("width");
    let rec = steady();
    let sweep = root().join("recordings/larkspur-sweep.smrec");
    let sweep = sweep.display().to_string();
    for args in [
        vec!["report", rec.as_str()],
        vec!["report", sweep.as_str()],
        vec!["budget"],
        vec!["parts"],
        vec!["parts", "74HC161"],
        vec!["failures", sweep.as_str()],
    ] {
        let o = run_in(&d, &args);
        assert!(o.status.success() || o.status.code() == Some(3), "{args:?}");
        let text = String::from_utf8_lossy(&o.stdout);
        // a single word longer than the width (a long path) is kept whole
        for line in text.lines().filter(|l| l.trim().contains(' ')) {
            assert!(line.chars().count() <= 100, "{args:?}: {line}");
        }
    }
    // COLUMNS sets another width
    let o = bin()
        .current_dir(&d)
        .args(["budget"])
        .env("COLUMNS", "300")
        .output()
        .unwrap();
    let text = String::from_utf8_lossy(&o.stdout);
    assert!(text.lines().any(|l| l.chars().count() > 100), "{text}");
}

#[test]
fn one_minus_sign_in_text_reports() {
    let d = tmp("minus");
    for args in [vec!["budget"], vec!["report", &steady()]] {
        let o = run_in(&d, &args);
        let text = String::from_utf8_lossy(&o.stdout);
        for line in text.lines() {
            assert!(
                !line.contains('\u{2212}') || !line.contains('-'),
                "{args:?}: {line}"
            );
        }
    }
    let o = run_in(&d, &["budget", "--freq", "3MHz"]);
    let text = String::from_utf8_lossy(&o.stdout);
    // a negative slack is written with ASCII '-'
    assert!(
        text.lines()
            .any(|l| l.contains(" -") && l.contains("ns") && !l.contains('\u{2212}')),
        "{text}"
    );
}

#[test]
fn help_reads_clearly() {
    let d = tmp("help");
    let top = String::from_utf8_lossy(&run_in(&d, &["--help"]).stdout).into_owned();
    assert!(top.contains("try: slackmeter watch --sim"), "{top}");
    let rec = String::from_utf8_lossy(&run_in(&d, &["record", "--help"]).stdout).into_owned();
    let heading = rec
        .find("Virtual probe (only with --sim)")
        .expect("a heading");
    let freq = rec.find("--freq").expect("--freq listed");
    assert!(
        freq > heading,
        "the sim's flags under their heading:\n{rec}"
    );
    let port = rec.find("Probe on a port").expect("a port heading");
    assert!(rec.find("--baud").unwrap() > port, "{rec}");
}

#[test]
fn messages_lead_with_what_happened_not_a_code() {
    let d = tmp("msg");
    for args in [
        vec!["listen", "/dev/no-such-port"],
        vec!["report", "no-such.smrec"],
        vec!["listen", "/dev/null"],
    ] {
        let o = run_in(&d, &args);
        let err = stderr(&o);
        assert!(!err.contains("slackmeter::"), "{args:?}: {err}");
        assert!(err.trim_start().starts_with('×'), "{args:?}: {err}");
    }
    let o = run_in(&d, &["listen", "/dev/null"]);
    assert!(stderr(&o).contains("not a serial device"), "{}", stderr(&o));
}

#[test]
fn binary_output_into_a_pipe_is_written() {
    // a pipe gets the frames (a terminal is refused: the tmux test below)
    let d = tmp("bin");
    let o = run_in(&d, &["sim", "--stdout", "--duration", "0.05s"]);
    assert_eq!(o.status.code(), Some(0), "{}", stderr(&o));
    assert!(o.stdout.len() > 1000);
}

/// Binary output onto a terminal is refused with a hint: `sim --stdout` in a tmux pane.
#[test]
fn binary_output_onto_a_terminal_is_refused() {
    if Command::new("tmux").arg("-V").output().is_err() {
        eprintln!("tmux is not installed: skipped (CI installs it)");
        return;
    }
    let sock = format!("slackmeter-cli-{}", std::process::id());
    let tmux = |args: &[&str]| {
        Command::new("tmux")
            .args(["-L", &sock])
            .args(args)
            .output()
            .expect("tmux runs")
    };
    let cmd = format!(
        "{} sim --stdout --duration 1s; echo \"exit=$?\"; sleep 30",
        env!("CARGO_BIN_EXE_slackmeter")
    );
    tmux(&[
        "new-session",
        "-d",
        "-s",
        "w",
        "-x",
        "100",
        "-y",
        "20",
        &cmd,
    ]);
    let mut screen = String::new();
    for _ in 0..100 {
        std::thread::sleep(std::time::Duration::from_millis(100));
        let o = tmux(&["capture-pane", "-p", "-t", "w"]);
        screen = String::from_utf8_lossy(&o.stdout).into_owned();
        if screen.contains("exit=") {
            break;
        }
    }
    tmux(&["kill-server"]);
    assert!(screen.contains("exit=2"), "{screen}");
    assert!(screen.contains("standard output is a terminal"), "{screen}");
    assert!(screen.contains("--out FILE"), "{screen}");
}

/// `--set` takes a channel label from the probe's self-description, and a refusal says in words
/// which setting, which value, which channel and why (the virtual probe on a pseudo-terminal).
#[test]
fn settings_by_label_and_refusals_in_words() {
    let d = tmp("set");
    let link = d.join("probe");
    let mut sim = bin()
        .args(["sim", "--pty", "--link"])
        .arg(&link)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .expect("sim runs");
    for _ in 0..100 {
        if link.exists() {
            break;
        }
        std::thread::sleep(std::time::Duration::from_millis(50));
    }
    let o = bin()
        .arg("listen")
        .arg(&link)
        .args([
            "--duration",
            "1s",
            "--set",
            "CLK:enable=on",
            "--set",
            "CLCK:enable=off",
        ])
        .args(["--set", "77:enable=on"])
        .output()
        .expect("listen runs");
    let _ = sim.kill();
    let _ = sim.wait();
    let err = stderr(&o);
    assert_eq!(o.status.code(), Some(0), "{err}");
    // CLK is channel 0 of the virtual probe: accepted, so never named in a refusal
    assert!(!err.contains("(CLK):"), "{err}");
    assert!(
        err.contains("the setting enable=off on channel CLCK")
            && err.contains("no channel labelled CLCK")
            && err.contains("CLK (0)"),
        "{err}"
    );
    assert!(
        err.contains("the setting enable=on on channel 77: no such channel"),
        "{err}"
    );
    assert!(!err.contains("CONFIGURE"), "{err}");
}

/// Every "value unit ± uncertainty unit" in a report has one unit on both sides.
#[test]
fn uncertainties_are_in_the_unit_of_their_value() {
    let d = tmp("units");
    let number = |t: &str| t.trim_start_matches(['+', '-']).parse::<f64>().is_ok();
    for name in ["steady", "sagging", "sweep"] {
        let rec = root().join(format!("recordings/larkspur-{name}.smrec"));
        let o = bin()
            .current_dir(&d)
            .arg("report")
            .arg(&rec)
            .env("COLUMNS", "1000")
            .output()
            .unwrap();
        let text = String::from_utf8_lossy(&o.stdout);
        let mut seen = 0;
        for line in text.lines() {
            for (left, right) in line.split(" ± ").zip(line.split(" ± ").skip(1)) {
                let l: Vec<&str> = left.split_whitespace().rev().take(2).collect();
                let r: Vec<&str> = right.split_whitespace().take(2).collect();
                if l.len() == 2 && r.len() == 2 && number(l[1]) && number(r[0]) {
                    let unit = r[1].trim_end_matches([',', ')', ';']);
                    assert_eq!(l[0], unit, "{name}: {line}");
                    seen += 1;
                }
            }
        }
        assert!(seen >= 3, "{name}: {text}");
    }
}

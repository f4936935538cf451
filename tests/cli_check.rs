//! `slackmeter check` as a user runs it: small faulty designs under tests/designs/check/ give
//! exit 2 with each error at its file:line:column, warnings alone give 0, the demo gives 0 and
//! no finding.

use std::path::PathBuf;
use std::process::{Command, Stdio};

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

/// Exit code, standard output and standard error of `slackmeter check ARGS`.
fn check(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .arg("check")
        .args(args)
        .current_dir(root())
        .env("NO_COLOR", "1")
        .env_remove("SLACKMETER_PARTS")
        .stdin(Stdio::null())
        .output()
        .expect("binary runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// "FILE:LINE:COLUMN" of the first `needle` on a line that is not a comment, counted here
/// from the file's text (1-based line and column in characters).
fn place(file: &str, needle: &str) -> String {
    let text = std::fs::read_to_string(root().join(file)).unwrap();
    for (i, line) in text.lines().enumerate() {
        if line.starts_with('#') {
            continue;
        }
        if let Some(at) = line.find(needle) {
            return format!("{file}:{}:{}", i + 1, line[..at].chars().count() + 1);
        }
    }
    panic!("{needle:?} not in {file}");
}

#[test]
fn an_input_nothing_drives_fails_with_its_place() {
    let f = "tests/designs/check/undriven-input.toml";
    let (code, out, err) = check(&[f]);
    assert_eq!(code, 2, "{err}");
    let at = place(f, "a_qq ->");
    assert!(
        err.contains(&format!("{at}: error: signal \"a_qq\" is an input")),
        "{at} in\n{err}"
    );
    assert!(err.contains("help: check the spelling"), "{err}");
    assert!(err.contains("1 error, 0 warnings"), "{err}");
    assert!(out.is_empty(), "{out}");
}

#[test]
fn a_capture_no_launch_reaches_fails_with_its_place() {
    let f = "tests/designs/check/unreached-capture.toml";
    let (code, _, err) = check(&[f]);
    assert_eq!(code, 2, "{err}");
    let capture = place(f, "\"carry\" }");
    let source = place(f, "c0 ->");
    assert!(
        err.contains(&format!("{capture}: error: capture \"carry at U4\"")),
        "{capture} in\n{err}"
    );
    assert!(
        err.contains(&format!("{source}: error: signal \"c0\"")),
        "{err}"
    );
    assert!(err.contains("2 errors, 0 warnings"), "{err}");
}

#[test]
fn warnings_alone_keep_exit_zero() {
    let f = "tests/designs/check/warnings-only.toml";
    let (code, out, err) = check(&[f]);
    assert_eq!(code, 0, "{err}");
    let carry = place(f, "carry\"");
    let part = place(f, "\"U3\"");
    assert!(
        err.contains(&format!(
            "{carry}: warning: signal \"carry\" is driven but goes nowhere"
        )),
        "{carry} in\n{err}"
    );
    assert!(
        err.contains(&format!("{part}: warning: part U3 is in no section")),
        "{part} in\n{err}"
    );
    assert!(!err.contains(": error:"), "{err}");
    assert!(out.contains("0 errors, 2 warnings"), "{out}");
}

#[test]
fn json_gives_every_finding_with_its_place_and_the_same_code() {
    let f = "tests/designs/check/unreached-capture.toml";
    let (code, out, _) = check(&[f, "--json"]);
    assert_eq!(code, 2);
    let doc: serde_json::Value = serde_json::from_str(&out).expect("stdout is JSON");
    assert_eq!(doc["errors"], 2);
    assert_eq!(doc["warnings"], 0);
    let findings = doc["findings"].as_array().unwrap();
    let capture = findings
        .iter()
        .find(|x| x["check"] == "unreached-capture")
        .expect("the unreached capture");
    assert_eq!(capture["severity"], "error");
    let at = format!(
        "{}:{}:{}",
        capture["file"].as_str().unwrap(),
        capture["line"],
        capture["column"]
    );
    assert_eq!(at, place(f, "\"carry\" }"));
    assert!(capture["help"].as_str().unwrap().contains("connect"));
}

#[test]
fn a_design_that_does_not_load_is_one_located_error() {
    let f = "tests/designs/bad/03-unknown-part.toml";
    let (code, _, err) = check(&[f]);
    assert_eq!(code, 2, "{err}");
    assert!(err.contains(": error: unknown part type"), "{err}");
    let (code, out, _) = check(&[f, "--json"]);
    assert_eq!(code, 2);
    let doc: serde_json::Value = serde_json::from_str(&out).expect("stdout is JSON");
    assert_eq!(doc["findings"][0]["check"], "load");
}

#[test]
fn the_demo_design_has_no_finding() {
    // the built-in demo, its file, and the same machine in long tables
    for args in [
        &[][..],
        &["designs/larkspur-8.toml"][..],
        &["tests/fixtures/larkspur-8-long.toml"][..],
    ] {
        let (code, out, err) = check(args);
        assert_eq!(code, 0, "{err}");
        assert!(err.is_empty(), "no warning expected:\n{err}");
        assert!(out.contains("0 errors, 0 warnings"), "{out}");
    }
    let (code, out, _) = check(&["--json"]);
    assert_eq!(code, 0);
    let doc: serde_json::Value = serde_json::from_str(&out).expect("stdout is JSON");
    assert_eq!(doc["findings"].as_array().map(Vec::len), Some(0));
}

#[test]
fn a_microstep_with_two_bus_drivers_on_fails_at_the_second_bit() {
    let f = "tests/designs/check/bus-contention.toml";
    let (code, _, err) = check(&[f]);
    assert_eq!(code, 2, "{err}");
    let at = place(f, "\"sum_out\", \"a_in\"");
    assert!(
        err.contains(&format!(
            "{at}: error: microstep \"add 2\" turns on 2 drivers of bus \"bus\" at once"
        )),
        "{at} in\n{err}"
    );
    assert!(err.contains("1 error, 0 warnings"), "{err}");
    let (code, out, _) = check(&[f, "--json"]);
    assert_eq!(code, 2);
    let doc: serde_json::Value = serde_json::from_str(&out).expect("stdout is JSON");
    assert_eq!(doc["findings"][0]["check"], "bus-contention");
    // the same machine with the clash taken out of the step is clean
    let fixed =
        std::env::temp_dir().join(format!("slackmeter-contention-{}.toml", std::process::id()));
    let text = std::fs::read_to_string(root().join(f)).unwrap();
    std::fs::write(
        &fixed,
        text.replace("\"a_out\", \"sum_out\", \"a_in\"", "\"sum_out\", \"a_in\""),
    )
    .unwrap();
    let (code, out, err) = check(&[fixed.to_str().unwrap()]);
    let _ = std::fs::remove_file(&fixed);
    assert_eq!(code, 0, "{err}");
    assert!(out.contains("0 errors, 0 warnings"), "{out}");
}

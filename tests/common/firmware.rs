//! Running a probe firmware's harness and reading its captures, for the firmware tests.

use std::path::{Path, PathBuf};
use std::process::Command;

use slackmeter::measure::{EngineConfig, Feed, Snapshot, Window};

/// `make -C firmware-protocol/FOLDER test` into a build folder under the test's temp dir (the
/// harness's PASS/FAIL lines printed, any FAIL a failed test); the folder of its captures.
pub fn run_harness(folder: &str) -> PathBuf {
    let build = Path::new(env!("CARGO_TARGET_TMPDIR")).join(folder);
    let out = Command::new("make")
        .args(["-C", &format!("firmware-protocol/{folder}"), "test"])
        .arg(format!("BUILD={}", build.display()))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .output()
        .expect("run make");
    let text = String::from_utf8_lossy(&out.stdout);
    println!("{text}{}", String::from_utf8_lossy(&out.stderr));
    assert!(out.status.success(), "the firmware harness failed:\n{text}");
    build.join("capture")
}

/// The host's session snapshot of the captured stream `dir/NAME.bin` (fed in odd-sized
/// chunks, as a serial link delivers it), and the text of the harness's `dir/NAME.truth`.
pub fn analyse_capture(dir: &Path, name: &str) -> (Snapshot, String) {
    let bytes = std::fs::read(dir.join(format!("{name}.bin"))).expect("capture");
    let mut feed = Feed::new(EngineConfig::default());
    for chunk in bytes.chunks(997) {
        feed.push(chunk);
    }
    let truth = std::fs::read_to_string(dir.join(format!("{name}.truth"))).expect("truth");
    (feed.engine.snapshot(Window::Session), truth)
}

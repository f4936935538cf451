//! Every input saved under `regressions/<target>/` (crashes the fuzzers found, once fixed) and
//! every seed under `seeds/<target>/` runs through its target on stable: none may panic.

use std::path::Path;

#[test]
fn saved_inputs_pass_their_targets() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut ran = 0;
    for dir in ["regressions", "seeds"] {
        for target in slackmeter_fuzz::TARGETS {
            let Ok(files) = std::fs::read_dir(root.join(dir).join(target)) else {
                continue;
            };
            for f in files.flatten() {
                let data = std::fs::read(f.path()).unwrap();
                slackmeter_fuzz::run(target, &data);
                ran += 1;
            }
        }
    }
    assert!(
        ran >= slackmeter_fuzz::TARGETS.len(),
        "{ran} inputs: seeds missing"
    );
}

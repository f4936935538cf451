//! Every malformed design under tests/designs/bad/ is rejected with its own specific message,
//! at the line and column its header names, and never panics.
//!
//! Header of each file: `# expect: <text the message must contain>` and `# at: LINE:COL`.

use std::path::Path;

use slackmeter::budget::{Design, Library};

fn header<'a>(text: &'a str, key: &str) -> Option<&'a str> {
    text.lines()
        .take_while(|l| l.starts_with('#'))
        .find_map(|l| l.strip_prefix(&format!("# {key}: ")))
}

#[test]
fn every_malformed_design_gets_its_specific_located_error() {
    let lib = Library::builtin();
    let dir = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/designs/bad");
    let mut files: Vec<_> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "toml"))
        .collect();
    files.sort();
    assert!(files.len() >= 20, "only {} malformed designs", files.len());
    let mut failures = Vec::new();
    for path in &files {
        let text = std::fs::read_to_string(path).unwrap();
        let expect = header(&text, "expect").expect("file has an expect header");
        let at = header(&text, "at");
        let name = path.file_name().unwrap().to_string_lossy().to_string();
        match Design::load(path, &lib) {
            Ok(_) => failures.push(format!(
                "{name}: accepted, expected error containing {expect:?}"
            )),
            Err(slackmeter::budget::design::DesignError::Source(e)) => {
                let loc = format!("{}:{}", e.line, e.column);
                if !e.message.contains(expect) {
                    failures.push(format!("{name}: message {:?} lacks {expect:?}", e.message));
                }
                if at != Some(loc.as_str()) {
                    failures.push(format!(
                        "{name}: error at {loc}, header says {at:?} ({})",
                        e.message
                    ));
                }
                if e.help.is_none() && !e.message.contains("expected") {
                    failures.push(format!("{name}: no hint for {:?}", e.message));
                }
                // the rendered diagnostic names the file and the location
                let rendered = format!("{e}");
                assert!(
                    rendered.contains(&format!("{}:{}", name, loc)) || rendered.contains(&loc),
                    "{rendered}"
                );
            }
            Err(other) => failures.push(format!("{name}: unexpected error kind {other}")),
        }
    }
    assert!(failures.is_empty(), "\n{}", failures.join("\n"));
}

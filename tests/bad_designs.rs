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

/// Random edits of the demo design, in its compact form and in long tables (deterministic):
/// parsing and solving never panic, and every rejection carries a location inside the text.
#[test]
fn mutated_designs_never_panic() {
    let long = include_str!("fixtures/larkspur-8-long.toml");
    for base in [slackmeter::budget::design::DEMO_DESIGN, long] {
        mutate(base);
    }
}

fn mutate(base: &str) {
    use slackmeter::budget::{OperatingPoint, solve};
    use slackmeter::diag::Source;
    let lib = Library::builtin();
    let alphabet: Vec<char> = "[]{}=\"',.-> \n#0123456789abcxyzUV°µ".chars().collect();
    let mut x: u64 = 0x5eed;
    let mut rnd = |n: usize| {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x % n as u64) as usize
    };
    let base: Vec<char> = base.chars().collect();
    let (mut accepted, mut rejected) = (0, 0);
    for _ in 0..1000 {
        let mut text = base.clone();
        for _ in 0..1 + rnd(4) {
            let at = rnd(text.len());
            match rnd(3) {
                0 => {
                    text.remove(at);
                }
                1 => text.insert(at, alphabet[rnd(alphabet.len())]),
                _ => text[at] = alphabet[rnd(alphabet.len())],
            }
        }
        let text: String = text.into_iter().collect();
        let lines = text.lines().count() + 1;
        let no_files = slackmeter::budget::design::NoIncludes;
        match Design::parse_with(Source::new("mutant.toml", text), &lib, &no_files) {
            Ok(d) => {
                accepted += 1;
                let b = solve(&d, &lib, &OperatingPoint::of(&d), None, Some(0.4));
                assert!(b.fmax_50_hz.is_finite() || b.period_required_ns == 0.0);
            }
            Err(e) => {
                rejected += 1;
                assert!(e.line >= 1 && e.line <= lines, "line {} of {lines}", e.line);
                assert!(!e.message.is_empty());
            }
        }
    }
    assert!(
        accepted > 0 && rejected > 0,
        "{accepted} accepted, {rejected} rejected"
    );
}

#[test]
fn unreachable_capture_is_a_warning_not_an_error() {
    let lib = Library::builtin();
    let text = format!(
        "{}\n[[arc]]\nfrom = \"island\"\nto = \"island_out\"\ndelay = {{ max = \"1 ns\" }}\n\
[[capture]]\nname = \"nobody reaches me\"\nsignal = \"island_out\"\nedge = \"rise\"\nsetup = \"5 ns\"\n",
        slackmeter::budget::design::DEMO_DESIGN
    );
    let d = Design::parse(slackmeter::diag::Source::new("t.toml", text), &lib).unwrap();
    assert!(
        d.warnings.iter().any(|w| w.contains("nobody reaches me")),
        "{:?}",
        d.warnings
    );
}

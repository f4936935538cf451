//! The documents stay true to the code they describe.

use slackmeter::budget::Library;

fn readme() -> String {
    std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/README.md")).unwrap()
}

#[test]
fn readme_lists_every_part_with_values_to_verify() {
    let text = readme();
    let section = text
        .split("### Values to verify")
        .nth(1)
        .expect("section present");
    let lib = Library::builtin();
    let mut missing = Vec::new();
    // a generic part has no values of its own: its variants are listed
    for p in lib.parts.iter().filter(|p| !p.is_generic()) {
        let to_verify = p.status.to_verify()
            || p.arcs
                .iter()
                .any(|a| a.status.to_verify() || (a.typ.is_some() && a.typ_status.to_verify()));
        if to_verify && !section.contains(&format!("| {} |", p.type_name)) {
            missing.push(p.type_name.clone());
        }
    }
    assert!(missing.is_empty(), "README lacks: {missing:?}");
}

#[test]
fn readme_opens_with_the_job_then_the_two_commands() {
    let text = readme();
    let fresh = text.split("## On a fresh machine").nth(1).unwrap();
    let block = fresh.split("```").nth(1).unwrap();
    assert!(block.contains("cargo run --release -- watch --sim"));
    assert!(block.contains("cargo test --workspace"));
    let ci = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/.ci/run")).unwrap();
    assert!(
        ci.contains("cargo test --workspace"),
        "CI runs the README's test command"
    );
}

#[test]
fn design_file_doc_examples_are_valid_designs() {
    let doc = std::fs::read_to_string(concat!(env!("CARGO_MANIFEST_DIR"), "/docs/DESIGN-FILE.md"))
        .unwrap();
    let lib = Library::builtin();
    // the long tables' example, then the compact forms' one
    for (n, name) in [
        (1, "the long tables' example"),
        (2, "the compact forms' example"),
    ] {
        let example = doc
            .split("```toml")
            .nth(n)
            .and_then(|s| s.split("```").next())
            .expect("a toml example");
        let d = slackmeter::budget::Design::parse(
            slackmeter::diag::Source::new("doc", example.to_string()),
            &lib,
        )
        .unwrap_or_else(|e| panic!("{name}: {e:?}"));
        assert!(!d.captures.is_empty(), "{name}");
    }
}

#[test]
fn nothing_in_the_repository_cites_a_file_outside_it() {
    // the folder beside the checkout that the project's notes once came from
    let outside = ["..", "/shared/"].concat();
    let root = std::path::Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut stack = vec![root.to_path_buf()];
    let mut hits = Vec::new();
    let mut read = 0;
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(&d).unwrap() {
            let p = e.unwrap().path();
            let name = p.file_name().unwrap().to_string_lossy().to_string();
            if p.is_dir() {
                let hidden = name.starts_with('.') && name != ".ci";
                if !hidden && name != "target" && name != "node_modules" {
                    stack.push(p);
                }
            } else if let Ok(text) = std::fs::read_to_string(&p) {
                read += 1;
                for (n, line) in text.lines().enumerate() {
                    if line.contains(&outside) {
                        hits.push(format!("{}:{}", p.display(), n + 1));
                    }
                }
            }
        }
    }
    assert!(read > 100, "read only {read} files");
    assert!(
        hits.is_empty(),
        "cites files outside the repository:\n{}",
        hits.join("\n")
    );
}

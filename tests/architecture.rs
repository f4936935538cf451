//! The dependency rules of DEVELOPERS.md, checked on the real source: every `use` tree (grouped,
//! nested, renamed) and every inline `crate::`, `super::`, `self::`, `slackmeter_core::` and
//! `slackmeter_io::` path of every file of the three crates is resolved to the file it names.
//! Between the crates Cargo enforces the direction (core ← io ← the program); inside each crate
//! this test does: every module must be listed in `ALLOWED`, may use only what it lists, and no
//! two files may import each other in a circle.

use std::collections::{BTreeMap, BTreeSet};
use std::path::{Path, PathBuf};

/// `crate/module` → the `crate/module`s it may use (besides itself). A module missing here fails.
const ALLOWED: &[(&str, &[&str])] = &[
    // slackmeter-core: pure computations
    ("core/lib", &["core/*"]),
    ("core/units", &[]),
    ("core/diag", &[]),
    ("core/probe", &[]),
    ("core/budget", &["core/units", "core/diag"]),
    ("core/power", &["core/budget", "core/units", "core/diag"]),
    // netlist import: text in (a netlist, the library's parts and pins), design text out
    ("core/import", &["core/budget", "core/diag"]),
    ("core/measure", &["core/probe", "core/units"]),
    (
        "core/margin",
        &["core/budget", "core/measure", "core/probe", "core/units"],
    ),
    // slackmeter-io: ports, files, pictures
    ("io/lib", &["io/*"]),
    ("io/link", &["core/probe", "core/units"]),
    ("io/record", &["core/probe", "core/units"]),
    ("io/sim", &["core/probe", "core/units"]),
    (
        "io/export",
        &["core/probe", "core/measure", "core/units", "io/record"],
    ),
    (
        "io/report",
        &[
            "core/budget",
            "core/measure",
            "core/margin",
            "core/probe",
            "core/units",
            "io/record",
        ],
    ),
    // the program
    ("bin/lib", &["*"]),
    ("bin/main", &["bin/cli"]),
    ("bin/cli", &["*"]),
    // the session layer: every source (port, virtual probe, replay) into one event stream
    (
        "bin/session",
        &[
            "core/measure",
            "core/probe",
            "io/link",
            "io/record",
            "io/sim",
        ],
    ),
    // the live view: sources only through the session
    (
        "bin/tui",
        &[
            "core/budget",
            "core/margin",
            "core/measure",
            "core/probe",
            "core/units",
            "bin/session",
        ],
    ),
];

/// Modules of the program crate that are the core's or the I/O crate's, re-exported.
const REEXPORTED: &[(&str, &str)] = &[
    ("budget", "core"),
    ("diag", "core"),
    ("margin", "core"),
    ("measure", "core"),
    ("probe", "core"),
    ("units", "core"),
    ("export", "io"),
    ("link", "io"),
    ("record", "io"),
    ("report", "io"),
    ("sim", "io"),
];

struct Krate {
    name: &'static str,
    src: PathBuf,
    /// module path → file
    modules: BTreeMap<Vec<String>, PathBuf>,
}

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn crates() -> Vec<Krate> {
    [
        ("core", root().join("crates/core/src")),
        ("io", root().join("crates/io/src")),
        ("bin", root().join("src")),
    ]
    .into_iter()
    .map(|(name, src)| {
        let mut modules = BTreeMap::new();
        let mut stack = vec![src.clone()];
        while let Some(d) = stack.pop() {
            for e in std::fs::read_dir(&d).unwrap() {
                let p = e.unwrap().path();
                if p.is_dir() {
                    stack.push(p);
                } else if p.extension().is_some_and(|x| x == "rs") {
                    modules.insert(module_path(&src, &p), p);
                }
            }
        }
        Krate { name, src, modules }
    })
    .collect()
}

/// `a/b.rs` → [a, b]; `a/mod.rs` → [a]; `lib.rs` → []; `main.rs` → [main].
fn module_path(src: &Path, file: &Path) -> Vec<String> {
    let rel = file.strip_prefix(src).unwrap();
    let mut segs: Vec<String> = rel
        .iter()
        .map(|s| s.to_string_lossy().trim_end_matches(".rs").to_string())
        .collect();
    if segs.last().is_some_and(|s| s == "mod" || s == "lib") {
        segs.pop();
    }
    segs
}

/// Source without comments, string literals and the trailing `#[cfg(test)] mod` block.
fn code_of(text: &str) -> String {
    let text = match text.find("#[cfg(test)]\nmod ") {
        Some(i) => &text[..i],
        None => text,
    };
    let b = text.as_bytes();
    let mut out = String::with_capacity(b.len());
    let mut i = 0;
    while i < b.len() {
        if b[i..].starts_with(b"//") {
            while i < b.len() && b[i] != b'\n' {
                i += 1;
            }
        } else if b[i..].starts_with(b"/*") {
            i += 2;
            while i + 1 < b.len() && !b[i..].starts_with(b"*/") {
                i += 1;
            }
            i += 2;
        } else if b[i] == b'"' {
            i += 1;
            while i < b.len() && b[i] != b'"' {
                if b[i] == b'\\' {
                    i += 1;
                }
                i += 1;
            }
            i += 1;
            out.push_str("\"\"");
        } else if b[i] == b'\'' && i + 2 < b.len() && (b[i + 2] == b'\'' || b[i + 1] == b'\\') {
            // a char literal ('x' or '\n'); lifetimes have no closing quote nearby
            let close = b[i + 1..].iter().position(|&c| c == b'\'').unwrap_or(0);
            i += close + 2;
        } else {
            out.push(b[i] as char);
            i += 1;
        }
    }
    out
}

/// Every path a `use` tree names, e.g. `a::{b, c::{d as e, self}}` → a::b, a::c::d, a::c.
fn expand_use(tree: &str) -> Vec<Vec<String>> {
    fn parse(s: &[char], pos: &mut usize, prefix: &[String], out: &mut Vec<Vec<String>>) {
        let mut cur: Vec<String> = prefix.to_vec();
        let mut word = String::new();
        loop {
            let c = s.get(*pos).copied();
            match c {
                Some(c) if c.is_alphanumeric() || c == '_' || c == '*' => {
                    word.push(c);
                    *pos += 1;
                }
                Some(':') => {
                    *pos += 1;
                    if !word.is_empty() {
                        cur.push(std::mem::take(&mut word));
                    }
                }
                Some('{') => {
                    *pos += 1;
                    loop {
                        parse(s, pos, &cur, out);
                        match s.get(*pos) {
                            Some(',') => *pos += 1,
                            _ => break,
                        }
                        while s.get(*pos).is_some_and(|c| c.is_whitespace()) {
                            *pos += 1;
                        }
                        if s.get(*pos) == Some(&'}') {
                            break;
                        }
                    }
                    *pos += 1; // '}'
                    return;
                }
                _ => {
                    if word == "self" {
                        word.clear();
                    }
                    if !word.is_empty() && word != "*" {
                        cur.push(word);
                    }
                    if cur.len() > prefix.len() || !cur.is_empty() {
                        out.push(cur);
                    }
                    return;
                }
            }
        }
    }
    // `x as y` names x; white space means nothing in a use tree
    let mut plain = String::new();
    let mut words = tree.split_whitespace().peekable();
    while let Some(w) = words.next() {
        if w == "as" {
            let renamed = words.next().unwrap_or("");
            // keep what follows the new name (`,` or `}`)
            plain.push_str(renamed.trim_start_matches(|c: char| c.is_alphanumeric() || c == '_'));
        } else {
            plain.push_str(w);
        }
    }
    let chars: Vec<char> = plain.chars().collect();
    let mut out = Vec::new();
    let mut pos = 0;
    parse(&chars, &mut pos, &[], &mut out);
    out
}

/// Every path in the code: use trees and inline qualified paths.
fn paths_in(code: &str) -> Vec<Vec<String>> {
    let mut out = Vec::new();
    let mut rest = code;
    while let Some(i) = rest.find("use ") {
        let before = rest[..i].chars().last();
        let after = &rest[i + 4..];
        if before.is_none_or(|c| !c.is_alphanumeric() && c != '_')
            && let Some(end) = after.find(';')
        {
            out.extend(expand_use(&after[..end]));
        }
        rest = after;
    }
    let words: Vec<&str> = code
        .split(|c: char| !(c.is_alphanumeric() || c == '_' || c == ':'))
        .collect();
    for w in words {
        let segs: Vec<String> = w
            .split("::")
            .filter(|s| !s.is_empty())
            .map(str::to_string)
            .collect();
        if segs.len() >= 2
            && ["crate", "super", "self", "slackmeter_core", "slackmeter_io"]
                .contains(&segs[0].as_str())
        {
            out.push(segs);
        }
    }
    out
}

/// (crate, file) a path from `file` (module `here` of crate `k`) names, if it is one of ours.
fn resolve<'a>(
    all: &'a [Krate],
    k: &'a Krate,
    here: &[String],
    is_dir_module: bool,
    path: &[String],
) -> Option<(&'a Krate, &'a PathBuf)> {
    let mut krate = k;
    let mut abs: Vec<String>;
    let mut segs = path;
    match segs.first()?.as_str() {
        "crate" => {
            abs = Vec::new();
            segs = &segs[1..];
        }
        "slackmeter_core" | "slackmeter_io" => {
            let name = if segs[0] == "slackmeter_core" {
                "core"
            } else {
                "io"
            };
            krate = all.iter().find(|c| c.name == name)?;
            abs = Vec::new();
            segs = &segs[1..];
        }
        "self" | "super" => {
            // the module a file's items live in: for `a/b.rs` that is [a, b]
            abs = here.to_vec();
            let _ = is_dir_module;
            while let Some(s) = segs.first() {
                match s.as_str() {
                    "self" => segs = &segs[1..],
                    "super" => {
                        abs.pop();
                        segs = &segs[1..];
                    }
                    _ => break,
                }
            }
        }
        first => {
            // a child module named without `self::` (edition 2018 relative path)
            let mut child = here.to_vec();
            child.push(first.to_string());
            if !k.modules.contains_key(&child) {
                return None;
            }
            abs = here.to_vec();
        }
    }
    abs.extend(segs.iter().cloned());
    if krate.name == "bin"
        && let Some(first) = abs.first()
        && let Some((_, to)) = REEXPORTED.iter().find(|(m, _)| m == first)
    {
        krate = all.iter().find(|c| c.name == *to)?;
    }
    // the longest prefix that is a module file
    for n in (0..=abs.len()).rev() {
        if let Some(f) = krate.modules.get(&abs[..n]) {
            return Some((krate, f));
        }
    }
    None
}

fn top_module(k: &Krate, file: &Path) -> String {
    let m = module_path(&k.src, file);
    format!("{}/{}", k.name, m.first().map_or("lib", |s| s.as_str()))
}

fn allowed(from: &str, to: &str) -> Option<bool> {
    let (_, list) = ALLOWED.iter().find(|(m, _)| *m == from)?;
    let to_crate = to.split('/').next().unwrap();
    Some(
        from == to
            || list
                .iter()
                .any(|a| *a == "*" || *a == to || *a == format!("{to_crate}/*")),
    )
}

struct Graph {
    /// file → files it uses (other than itself), with the line that does
    edges: BTreeMap<PathBuf, BTreeSet<PathBuf>>,
    violations: Vec<String>,
    files: usize,
}

fn graph() -> Graph {
    let all = crates();
    let mut g = Graph {
        edges: BTreeMap::new(),
        violations: Vec::new(),
        files: 0,
    };
    for k in &all {
        for (here, file) in &k.modules {
            g.files += 1;
            let from = top_module(k, file);
            if !ALLOWED.iter().any(|(m, _)| *m == from) {
                g.violations.push(format!(
                    "{}: module {from} is not in tests/architecture.rs ALLOWED: add it with what it may use",
                    file.display()
                ));
            }
            let code = code_of(&std::fs::read_to_string(file).unwrap());
            let is_dir = file.ends_with("mod.rs") || file.ends_with("lib.rs");
            let entry = g.edges.entry(file.clone()).or_default();
            for p in paths_in(&code) {
                let Some((tk, tf)) = resolve(&all, k, here, is_dir, &p) else {
                    continue;
                };
                if tf == file {
                    continue;
                }
                entry.insert(tf.clone());
                let to = top_module(tk, tf);
                if allowed(&from, &to) == Some(false) {
                    g.violations.push(format!(
                        "{}: {from} uses {to} ({})",
                        file.display(),
                        p.join("::")
                    ));
                }
            }
        }
    }
    g.violations.sort();
    g.violations.dedup();
    g
}

#[test]
fn modules_depend_only_downwards() {
    let g = graph();
    assert!(g.files > 40, "scanned only {} files", g.files);
    assert!(g.violations.is_empty(), "\n{}", g.violations.join("\n"));
}

/// A module (the lib.rs/mod.rs that declares children and re-exports them) may be used by its
/// children only if it uses none of them back; otherwise the two files form a circle.
#[test]
fn no_two_files_import_each_other_in_a_circle() {
    let g = graph();
    // Tarjan-free: depth-first search with colours, reporting each cycle found
    let mut colour: BTreeMap<&PathBuf, u8> = BTreeMap::new();
    let mut cycles = Vec::new();
    fn visit<'a>(
        n: &'a PathBuf,
        g: &'a Graph,
        colour: &mut BTreeMap<&'a PathBuf, u8>,
        stack: &mut Vec<&'a PathBuf>,
        cycles: &mut Vec<String>,
    ) {
        colour.insert(n, 1);
        stack.push(n);
        for m in g.edges.get(n).into_iter().flatten() {
            match colour.get(m).copied().unwrap_or(0) {
                0 => visit(m, g, colour, stack, cycles),
                1 => {
                    let i = stack.iter().position(|x| *x == m).unwrap();
                    let names: Vec<String> = stack[i..]
                        .iter()
                        .map(|p| p.strip_prefix(root()).unwrap().display().to_string())
                        .collect();
                    cycles.push(format!("{} → {}", names.join(" → "), names[0]));
                }
                _ => {}
            }
        }
        stack.pop();
        colour.insert(n, 2);
    }
    for n in g.edges.keys() {
        if colour.get(n).copied().unwrap_or(0) == 0 {
            visit(n, &g, &mut colour, &mut Vec::new(), &mut cycles);
        }
    }
    assert!(cycles.is_empty(), "import circles:\n{}", cycles.join("\n"));
}

#[test]
fn use_trees_and_paths_are_read_as_the_compiler_reads_them() {
    let got = expand_use("crate::a::{b, c::{d as e, self}, f::*}");
    let want: Vec<Vec<String>> = [
        vec!["crate", "a", "b"],
        vec!["crate", "a", "c", "d"],
        vec!["crate", "a", "c"],
        vec!["crate", "a", "f"],
    ]
    .iter()
    .map(|v| v.iter().map(|s| s.to_string()).collect())
    .collect();
    assert_eq!(got, want);
    let code = code_of("// crate::x::y\nlet s = \"crate::q::r\"; super::super::z::w(); '{';");
    let p = paths_in(&code);
    assert_eq!(p, vec![vec!["super", "super", "z", "w"]]);
}

#[test]
fn only_the_link_touches_the_serial_port_crate() {
    for k in crates() {
        for file in k.modules.values() {
            if top_module(&k, file) == "io/link" {
                continue;
            }
            let code = code_of(&std::fs::read_to_string(file).unwrap());
            assert!(
                !code.contains("serialport::"),
                "{} uses serialport",
                file.display()
            );
        }
    }
}

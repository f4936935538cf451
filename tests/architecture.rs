//! Dependency direction between modules (DEVELOPERS.md, "Dependency rules"), checked by scanning
//! `use crate::…` / `crate::…` paths in each module's source files.

use std::path::Path;

/// module → modules it must never reach.
const FORBIDDEN: &[(&str, &[&str])] = &[
    (
        "units",
        &[
            "budget", "measure", "margin", "link", "sim", "record", "report", "tui", "cli", "diag",
        ],
    ),
    (
        "diag",
        &[
            "budget", "measure", "margin", "link", "sim", "record", "report", "tui", "cli",
        ],
    ),
    (
        "budget",
        &[
            "measure", "margin", "link", "sim", "record", "report", "tui", "cli",
        ],
    ),
    (
        "measure",
        &[
            "budget", "margin", "link", "sim", "record", "report", "tui", "cli",
        ],
    ),
    (
        "margin",
        &["link", "sim", "record", "report", "tui", "cli", "export"],
    ),
    (
        "sim",
        &[
            "link", "measure", "budget", "margin", "record", "report", "tui", "cli",
        ],
    ),
    (
        "link",
        &[
            "measure", "budget", "margin", "sim", "record", "report", "tui", "cli",
        ],
    ),
    (
        "record",
        &[
            "measure", "budget", "margin", "sim", "link", "report", "tui", "cli",
        ],
    ),
    ("report", &["link", "sim", "tui", "cli"]),
    (
        "export",
        &["link", "sim", "measure", "budget", "margin", "tui", "cli"],
    ),
    ("tui", &["cli"]),
];

fn sources_of(module: &str) -> Vec<std::path::PathBuf> {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut out = Vec::new();
    let file = src.join(format!("{module}.rs"));
    if file.exists() {
        out.push(file);
    }
    let dir = src.join(module);
    if dir.is_dir() {
        let mut stack = vec![dir];
        while let Some(d) = stack.pop() {
            for e in std::fs::read_dir(d).unwrap() {
                let p = e.unwrap().path();
                if p.is_dir() {
                    stack.push(p);
                } else if p.extension().is_some_and(|x| x == "rs") {
                    out.push(p);
                }
            }
        }
    }
    out
}

#[test]
fn modules_depend_only_downwards() {
    let mut violations = Vec::new();
    let mut checked = 0;
    for (module, forbidden) in FORBIDDEN {
        for file in sources_of(module) {
            checked += 1;
            let text = std::fs::read_to_string(&file).unwrap();
            for (n, line) in text.lines().enumerate() {
                let code = line.split("//").next().unwrap_or("");
                for f in *forbidden {
                    if code.contains(&format!("crate::{f}::"))
                        || code.contains(&format!("crate::{f};"))
                        || code.contains(&format!("crate::{f}}}"))
                        || code.contains(&format!("crate::{{{f}"))
                    {
                        violations.push(format!("{}:{}: {module} uses {f}", file.display(), n + 1));
                    }
                }
            }
        }
    }
    assert!(checked > 5, "scanned only {checked} files");
    assert!(violations.is_empty(), "\n{}", violations.join("\n"));
}

#[test]
fn only_the_link_touches_the_serial_port_crate() {
    let src = Path::new(env!("CARGO_MANIFEST_DIR")).join("src");
    let mut stack = vec![src.clone()];
    while let Some(d) = stack.pop() {
        for e in std::fs::read_dir(d).unwrap() {
            let p = e.unwrap().path();
            if p.is_dir() {
                stack.push(p);
            } else if p.extension().is_some_and(|x| x == "rs") && !p.starts_with(src.join("link")) {
                let text = std::fs::read_to_string(&p).unwrap();
                assert!(
                    !text.contains("serialport::"),
                    "{} uses serialport",
                    p.display()
                );
            }
        }
    }
}

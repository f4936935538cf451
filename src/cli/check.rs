//! `slackmeter check`: a design file read and checked without solving its budget; every
//! finding located (file:line:column, what, how to fix), as diagnostics or JSON.

use std::path::PathBuf;

use miette::miette;
use serde::Serialize;

use super::args::LibraryArgs;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::Design;
use crate::budget::design::{
    Checked, DEMO_DESIGN, DEMO_NAME, DesignError, FromDisk, IncludeReader, Lint, NoIncludes,
    Severity,
};
use crate::diag::Source;

/// Options of `check`.
#[derive(clap::Args, Debug)]
pub struct CheckArgs {
    /// Design file (TOML); the built-in demo design when absent.
    pub design: Option<PathBuf>,
    /// The part library.
    #[command(flatten)]
    pub library: LibraryArgs,
    /// Print a JSON document of the findings instead of the diagnostics.
    #[arg(long)]
    pub json: bool,
}

/// One finding as the JSON document gives it.
#[derive(Serialize)]
struct JsonFinding<'a> {
    check: Lint,
    severity: Severity,
    file: &'a str,
    line: usize,
    column: usize,
    message: &'a str,
    help: Option<&'a str>,
}

/// The JSON document.
#[derive(Serialize)]
struct JsonReport<'a> {
    design: &'a str,
    errors: usize,
    warnings: usize,
    findings: Vec<JsonFinding<'a>>,
}

/// Print to standard output (a closed pipe is a runtime failure, not a panic).
fn emit(text: &str) -> CliResult<()> {
    use std::io::Write;
    std::io::stdout()
        .lock()
        .write_all(text.as_bytes())
        .map_err(CliError::io("standard output"))
}

/// "1 error", "2 warnings", "3 launches".
fn count(n: usize, word: &str) -> String {
    let plural = if word.ends_with("ch") { "es" } else { "s" };
    format!("{n} {word}{}", if n == 1 { "" } else { plural })
}

/// `slackmeter check`.
pub fn run(a: CheckArgs) -> CliResult<Outcome> {
    let lib = a.library.load()?;
    let (src, name, reader): (Source, String, &dyn IncludeReader) = match &a.design {
        Some(p) => {
            let text = crate::diag::read_text(p).map_err(|e| DesignError::Io {
                path: p.display().to_string(),
                err: e,
            })?;
            let name = p.display().to_string();
            (Source::new(name.clone(), text), name, &FromDisk)
        }
        None => (
            Source::new(DEMO_NAME, DEMO_DESIGN),
            format!("{DEMO_NAME} (built-in demo)"),
            &NoIncludes,
        ),
    };
    let mut checked = Design::check(src, &lib, reader);
    let errors = checked
        .findings
        .iter()
        .filter(|f| f.severity() == Severity::Error)
        .count();
    let warnings = checked.findings.len() - errors;
    let design = checked.design.take();
    if a.json {
        emit(&format!("{}\n", json(&checked, &name, errors, warnings)?))?;
    } else {
        // rendered by the handler the program installs (the same one its errors use)
        for f in checked.findings {
            eprintln!("{:?}", miette::Report::new(f));
        }
    }
    let tally = format!("{}, {}", count(errors, "error"), count(warnings, "warning"));
    if errors > 0 {
        return Err(CliError::input(miette!(
            help = "fix the errors listed above (each says where and how), then check again",
            "{name}: {tally}"
        )));
    }
    if !a.json {
        let what = design.as_ref().map_or(String::new(), |d| {
            format!(
                " ({}, {}, {}, {}, {})",
                count(d.instances.len(), "part"),
                count(d.signals.len(), "signal"),
                count(d.launches.len(), "launch"),
                count(d.arcs.len(), "arc"),
                count(d.captures.len(), "capture")
            )
        });
        emit(&format!("{name}: {tally}{what}\n"))?;
    }
    Ok(Outcome::Done)
}

/// The findings as a JSON document.
fn json(c: &Checked, name: &str, errors: usize, warnings: usize) -> CliResult<String> {
    let findings = c
        .findings
        .iter()
        .map(|f| JsonFinding {
            check: f.lint,
            severity: f.severity(),
            file: &f.located.file,
            line: f.located.line,
            column: f.located.column,
            message: &f.located.message,
            help: f.located.help.as_deref(),
        })
        .collect();
    let doc = JsonReport {
        design: name,
        errors,
        warnings,
        findings,
    };
    Ok(serde_json::to_string_pretty(&doc)?)
}

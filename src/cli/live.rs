//! The live view on a new session (watch, replay). The session starts before the terminal is
//! taken, so a missing port or file is reported as plain text with its exit code.

use std::path::PathBuf;

use super::design::embedded;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::{Design, Library};
use crate::measure::EngineConfig;
use crate::session::{self, Session, SourceSpec};
use crate::tui::run::{Options, run};

/// Refuse to start the view when standard input or output is no terminal (a pipe, a service,
/// a CI job): the message names `alternatives`, the commands that work without one.
fn need_terminal(alternatives: &str) -> CliResult<()> {
    use std::io::IsTerminal;
    let which = match (
        std::io::stdin().is_terminal(),
        std::io::stdout().is_terminal(),
    ) {
        (true, true) => return Ok(()),
        (false, true) => "standard input is",
        (true, false) => "standard output is",
        (false, false) => "standard input and output are",
    };
    Err(CliError::input(miette::miette!(
        help = format!("run it in a terminal, or use {alternatives}"),
        "the live view needs a terminal, and {which} not one"
    )))
}

/// Where the view records and what it replays beside the source.
#[derive(Default)]
pub struct ViewFiles {
    /// Record from the start into this file.
    pub record: Option<PathBuf>,
    /// The folder `R` offers (None: the current one).
    pub record_dir: Option<PathBuf>,
    /// Marks of a replayed recording, s since its start.
    pub replay_marks: Vec<f64>,
}

/// Start `source` (shown as `what`) and run the live view on it until quit; without a terminal
/// the message names `alternatives`.
pub fn show(
    source: SourceSpec,
    what: String,
    design: Option<Design>,
    library: Library,
    files: ViewFiles,
    alternatives: &str,
) -> CliResult<Outcome> {
    let header = session::header(what, vec![], design.as_ref().map(embedded), None);
    let session = Session::start(source, header, Some(EngineConfig::default()))?;
    // after the start, so a missing port or file is still named first
    need_terminal(alternatives)?;
    run(Options {
        session,
        design,
        library,
        record: files.record,
        record_dir: files.record_dir.unwrap_or_default(),
        replay_marks: files.replay_marks,
    })?;
    Ok(Outcome::Done)
}

//! `slackmeter replay`: a recording in the live view, paced at real time × speed.

use std::path::PathBuf;

use miette::miette;

use super::design::DesignArgs;
use super::error::{CliError, CliResult, Outcome};
use super::live::{ViewFiles, show};
use crate::record::Recording;
use crate::record::format::ChunkKind;
use crate::session::SourceSpec;

/// Options of `replay`.
#[derive(clap::Args, Debug)]
pub struct ReplayArgs {
    /// The recording.
    pub file: PathBuf,
    /// The design the slack is shown against.
    #[command(flatten)]
    pub design: DesignArgs,
    /// Speed factor (1 = real time).
    #[arg(long, default_value_t = 1.0)]
    pub speed: f64,
}

/// `slackmeter replay`.
pub fn run(a: ReplayArgs) -> CliResult<Outcome> {
    if !(a.speed > 0.0 && a.speed.is_finite()) {
        return Err(CliError::input(miette!(
            "--speed must be a positive number"
        )));
    }
    let library = a.design.library()?;
    let mut rec = Recording::open(&a.file)?;
    let header = rec.parsed.header.clone();
    let t0 = header.start_unix_ns;
    // the marks' times, for `n` (a damaged end stops the scan; the replay reports it)
    let mut replay_marks = Vec::new();
    while let Ok(Some(c)) = rec.chunk_reader().next_chunk() {
        if c.kind == ChunkKind::Mark {
            replay_marks.push(c.host_ns.saturating_sub(t0) as f64 * 1e-9);
        }
    }
    let design = a.design.or_embedded(&header, &a.file, &library)?;
    let spec = SourceSpec::Replay {
        path: a.file.clone(),
        speed: a.speed,
    };
    let files = ViewFiles {
        replay_marks,
        ..ViewFiles::default()
    };
    show(spec, a.file.display().to_string(), design, library, files)
}

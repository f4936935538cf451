//! `slackmeter replay`: a recording in the live view, paced at real time × speed.

use std::path::PathBuf;

use miette::miette;

use super::design::DesignArgs;
use super::error::{CliError, CliResult, Outcome};
use super::live::show;
use crate::record::Recording;
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
    let header = Recording::open(&a.file)?.parsed.header;
    let design = a.design.or_embedded(&header, &a.file, &library)?;
    let spec = SourceSpec::Replay {
        path: a.file.clone(),
        speed: a.speed,
    };
    show(spec, a.file.display().to_string(), design, library, None)
}

//! `slackmeter watch`: the live view on a probe or the virtual probe.

use std::path::PathBuf;

use super::args::ProbeArgs;
use super::design::DesignArgs;
use miette::miette;

use super::error::{CliError, CliResult, Outcome};
use super::live::{ViewFiles, show};
use super::model::build_model;
use crate::session::{Pace, SimSpec, SourceSpec};

/// Options of `watch`.
#[derive(clap::Args, Debug)]
pub struct WatchArgs {
    /// The probe, or the virtual probe.
    #[command(flatten)]
    pub probe: ProbeArgs,
    /// The design the slack is shown against (and --fault-on-typ fails by).
    #[command(flatten)]
    pub design: DesignArgs,
    /// Record from the start into this file (R starts/stops recording anyway); an existing
    /// file is refused.
    #[arg(long, value_name = "FILE")]
    pub record: Option<PathBuf>,
    /// The folder R offers to record into (default: the current one).
    #[arg(long, value_name = "DIR")]
    pub record_dir: Option<PathBuf>,
    /// Show no slack (no design).
    #[arg(long)]
    pub no_design: bool,
}

/// `slackmeter watch`.
pub fn run(a: WatchArgs) -> CliResult<Outcome> {
    a.probe
        .check("`slackmeter watch --sim` or `slackmeter watch /dev/ttyUSB0`")?;
    if let Some(p) = &a.record
        && p.exists()
    {
        return Err(CliError::input(miette!(
            help = "give a new file name, or move the old recording away",
            "--record {}: the file exists; slackmeter does not write over a recording",
            p.display()
        )));
    }
    if let Some(d) = &a.record_dir
        && !d.is_dir()
    {
        return Err(CliError::input(miette!(
            help = "create the folder first, or name an existing one",
            "--record-dir {}: no such folder",
            d.display()
        )));
    }
    let library = a.design.library()?;
    let design = a.design.or_demo(&library)?;
    let (spec, what) = match &a.probe.port {
        Some(port) => (
            SourceSpec::Port(a.probe.port_options.link_config(port)),
            port.display().to_string(),
        ),
        None => {
            let setup = build_model(&a.probe.model, &design, &library)?;
            let spec = SimSpec {
                model: setup.model,
                notes: setup.notes,
                pace: Pace::RealTime,
                duration_ns: None,
            };
            (SourceSpec::Sim(Box::new(spec)), "virtual probe".to_string())
        }
    };
    let design = (!a.no_design).then_some(design);
    let files = ViewFiles {
        record: a.record,
        record_dir: a.record_dir,
        replay_marks: Vec::new(),
    };
    show(
        spec,
        what,
        design,
        library,
        files,
        "`slackmeter record` (into a file, with a progress line) or `slackmeter listen` (running counts as text)",
    )
}

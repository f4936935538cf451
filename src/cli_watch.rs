//! Command-line edge for the live view: `watch` and `replay`.

use std::path::PathBuf;

use miette::{Result, miette};

use crate::budget::{Design, Library};
use crate::cli_probe::{SimModelArgs, build_model};
use crate::tui::run::{Options, SourceSpec, run};

/// Options of `watch`.
#[derive(clap::Args, Debug)]
pub struct WatchArgs {
    /// Serial device of the probe (omit with --sim).
    pub port: Option<PathBuf>,
    /// Watch the virtual probe running the demo scenario (its flags as for `slackmeter sim`).
    #[arg(long)]
    pub sim: bool,
    /// The virtual probe's settings (with --sim).
    #[command(flatten)]
    pub model: SimModelArgs,
    /// Record from the start into this file (R starts/stops recording anyway).
    #[arg(long, value_name = "FILE")]
    pub record: Option<PathBuf>,
    /// A real probe's port options.
    #[command(flatten)]
    pub port_options: crate::cli_probe::PortArgs,
    /// Show no slack (no design).
    #[arg(long)]
    pub no_design: bool,
}

/// Options of `replay`.
#[derive(clap::Args, Debug)]
pub struct ReplayArgs {
    /// The recording.
    pub file: PathBuf,
    /// Judge against this design (the embedded one otherwise).
    #[arg(long)]
    pub design: Option<PathBuf>,
    /// Speed factor (1 = real time).
    #[arg(long, default_value_t = 1.0)]
    pub speed: f64,
}

fn design_of(path: &Option<PathBuf>, lib: &Library) -> Result<Design> {
    match path {
        Some(p) => Design::load(p, lib).map_err(miette::Report::new),
        None => Ok(Design::demo(lib)),
    }
}

/// `slackmeter watch`.
pub fn watch_cmd(a: WatchArgs) -> Result<i32> {
    if a.sim == a.port.is_some() {
        return Err(miette!(
            help = "e.g. `slackmeter watch --sim` or `slackmeter watch /dev/ttyUSB0`",
            "give either a PORT or --sim"
        ));
    }
    let lib = Library::builtin();
    let design = if a.no_design {
        None
    } else {
        Some(design_of(&a.model.design, &lib)?)
    };
    let source = if a.sim {
        let (m, notes) = build_model(&a.model)?;
        SourceSpec::Sim(m, notes)
    } else {
        SourceSpec::Port(a.port_options.link_config(a.port.clone().expect("checked")))
    };
    run(Options {
        source,
        design,
        record: a.record,
    })?;
    Ok(crate::cli::EXIT_OK)
}

/// `slackmeter replay`.
pub fn replay_cmd(a: ReplayArgs) -> Result<i32> {
    if !(a.speed > 0.0 && a.speed.is_finite()) {
        return Err(miette!("--speed must be a positive number"));
    }
    let lib = Library::builtin();
    let rec = crate::record::Recording::open(&a.file).map_err(miette::Report::new)?;
    let design = match (&a.design, &rec.parsed.header.design) {
        (Some(_), _) => Some(design_of(&a.design, &lib)?),
        (None, Some(e)) => Some(
            Design::parse(
                crate::diag::Source::new(e.file.clone(), e.text.clone()),
                &lib,
            )
            .map_err(|e| miette::Report::new(*e))?,
        ),
        (None, None) => None,
    };
    drop(rec);
    run(Options {
        source: SourceSpec::Replay(a.file, a.speed),
        design,
        record: None,
    })?;
    Ok(crate::cli::EXIT_OK)
}

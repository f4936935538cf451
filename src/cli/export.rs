//! `slackmeter export`: a recording's signals for a waveform viewer (VCD) or a spreadsheet (CSV).

use std::path::{Path, PathBuf};

use miette::miette;

use super::error::{CliError, CliResult, Outcome};
use super::output;
use crate::export;
use crate::record::Recording;

/// Options of `export`.
#[derive(clap::Args, Debug)]
pub struct ExportArgs {
    /// The recording.
    pub file: PathBuf,
    /// Write a value change dump (IEEE 1364 VCD) here (`-` for standard output).
    #[arg(long, value_name = "OUT")]
    pub vcd: Option<PathBuf>,
    /// Write a CSV here (time_s, channel, label, kind, value; `-` for standard output).
    #[arg(long, value_name = "OUT")]
    pub csv: Option<PathBuf>,
    /// Overwriting.
    #[command(flatten)]
    pub force: output::ForceArgs,
}

/// `slackmeter export`.
pub fn run(a: ExportArgs) -> CliResult<Outcome> {
    if a.vcd.is_none() && a.csv.is_none() {
        return Err(CliError::input(miette!(
            help = "e.g. --vcd run.vcd or --csv run.csv",
            "nothing to export: give --vcd and/or --csv"
        )));
    }
    if let (Some(v), Some(c)) = (&a.vcd, &a.csv)
        && v == c
    {
        return Err(CliError::input(miette!(
            "--vcd and --csv name the same file {}: give each its own",
            v.display()
        )));
    }
    let inputs = [a.file.as_path()];
    let create =
        |p: &Path| output::create_or_stdout(p, &inputs, a.force.force).map(std::io::BufWriter::new);
    let wrote = |p: &Path, what: String| {
        if !output::is_stdout(p) {
            eprintln!("wrote {} ({what})", p.display());
        }
    };
    let mut rec = Recording::open(&a.file)?;
    let s = export::collect(&mut rec)?;
    if s.signals.is_empty() {
        return Err(CliError::input(miette!(
            "{}: the recording holds no probe self-description, so its channels are unknown",
            a.file.display()
        )));
    }
    if let Some(p) = &a.vcd {
        export::write_vcd(&s, create(p)?).map_err(CliError::io(p.display()))?;
        wrote(p, format!("{} events", s.events.len()));
    }
    if let Some(p) = &a.csv {
        export::write_csv(&s, create(p)?).map_err(|e| closed_or(e, p))?;
        wrote(p, format!("{} rows", s.events.len()));
    }
    Ok(Outcome::Done)
}

/// A CSV writer's failure: the quiet end when standard output's reader went away.
fn closed_or(e: csv::Error, p: &Path) -> CliError {
    match e.into_kind() {
        csv::ErrorKind::Io(io) => CliError::io(p.display())(io),
        other => CliError::runtime(miette!("cannot write {}: {other:?}", p.display())),
    }
}

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
    /// Write a value change dump (IEEE 1364 VCD) here.
    #[arg(long, value_name = "OUT")]
    pub vcd: Option<PathBuf>,
    /// Write a CSV here (time_s, channel, label, kind, value).
    #[arg(long, value_name = "OUT")]
    pub csv: Option<PathBuf>,
    /// Write over output files that exist (never over the recording itself).
    #[arg(long)]
    pub replace: bool,
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
    let create = |p: &Path| output::create(p, &inputs, a.replace).map(std::io::BufWriter::new);
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
        eprintln!("wrote {} ({} events)", p.display(), s.events.len());
    }
    if let Some(p) = &a.csv {
        export::write_csv(&s, create(p)?)
            .map_err(|e| CliError::runtime(miette!("cannot write {}: {e}", p.display())))?;
        eprintln!("wrote {} ({} rows)", p.display(), s.events.len());
    }
    Ok(Outcome::Done)
}

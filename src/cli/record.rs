//! `slackmeter record`: a probe (or the virtual probe) into a recording, headless, with a
//! progress line.

use std::path::PathBuf;
use std::time::{Duration, Instant};

use miette::miette;

use super::args::{self, ProbeArgs};
use super::design::{DesignArgs, embedded};
use super::error::{CliError, CliResult, Outcome};
use super::model::build_model;
use super::output::{Progress, count};
use super::signal::{interrupt_flag, interrupted};
use crate::record::{Header, RecCounts};
use crate::session::{self, Event, Next, Pace, Session, SimSpec, SourceSpec};

/// Options of `record`.
#[derive(clap::Args, Debug)]
pub struct RecordArgs {
    /// The probe, or the virtual probe.
    #[command(flatten)]
    pub probe: ProbeArgs,
    /// The design the recording stores (and --fault-on-typ fails by).
    #[command(flatten)]
    pub design: DesignArgs,
    /// The recording to write, e.g. run.smrec (an existing file only with --force).
    #[arg(short = 'o', long, value_name = "FILE")]
    pub output: PathBuf,
    /// Overwriting.
    #[command(flatten)]
    pub force: super::output::ForceArgs,
    /// Stop after this long, e.g. 30s (otherwise at Ctrl-C).
    #[arg(long, value_parser = args::pos_time)]
    pub duration: Option<f64>,
    /// A note stored in the file (repeatable).
    #[arg(long)]
    pub note: Vec<String>,
    /// With --sim: generate as fast as possible, host times following simulated time (for
    /// making files; the content is the same as a paced run).
    #[arg(long)]
    pub fast: bool,
}

/// The progress line: rates over the recent window, or with `p` None over the whole run (the
/// last line).
fn progress_line(path: &str, s: &Session, rec: RecCounts, p: Option<&mut Progress>) -> String {
    let c = s.counters();
    let secs = s.elapsed_s();
    let (bytes_per_s, frames_per_s) = match p {
        Some(p) => p.rates(secs, rec.data_bytes, c.frames),
        None => (
            rec.data_bytes as f64 / secs.max(1e-9),
            c.frames as f64 / secs.max(1e-9),
        ),
    };
    format!(
        "recording {path}: {secs:.1} s, {:.2} MB ({:.0} kB/s), {} frames ({:.0}/s), {} lost, {}, backlog {} kB{}",
        rec.file_bytes as f64 / 1e6,
        bytes_per_s / 1e3,
        c.frames,
        frames_per_s,
        c.lost_frames,
        count(c.crc_errors, "CRC error"),
        rec.backlog / 1000,
        if rec.dropped > 0 {
            format!(", RECORDER DROPPED {} bytes", rec.dropped)
        } else {
            String::new()
        }
    )
}

/// The session to record: its source and the recording's header.
fn source(a: &RecordArgs) -> CliResult<(SourceSpec, Header)> {
    let lib = a.design.library()?;
    let notes = a.note.clone();
    let Some(port) = &a.probe.port else {
        let d = a.design.or_demo(&lib)?;
        let setup = build_model(&a.probe.model, &d, &lib)?;
        let what = format!("virtual probe, scenario {}", a.probe.model.scenario);
        let header = session::header(what, notes, Some(embedded(&d)), Some(setup.shown));
        let spec = SimSpec {
            model: setup.model,
            notes: setup.notes,
            pace: if a.fast { Pace::Fast } else { Pace::RealTime },
            duration_ns: a.duration,
        };
        return Ok((SourceSpec::Sim(Box::new(spec)), header));
    };
    let stored = a.design.given(&lib)?.as_ref().map(embedded);
    let what = format!("probe on {}", port.display());
    let header = session::header(what, notes, stored, None);
    Ok((
        SourceSpec::Port(a.probe.port_options.link_config(port)),
        header,
    ))
}

/// `slackmeter record`.
pub fn run(a: RecordArgs) -> CliResult<Outcome> {
    a.probe.check(
        "`slackmeter record --sim -o run.smrec --duration 10s` or `slackmeter record /dev/ttyUSB0 -o run.smrec`",
    )?;
    let sim = a.probe.sim;
    if sim && a.fast && a.duration.is_none() {
        return Err(CliError::input(miette!(
            help = "add --duration, e.g. --duration 10s",
            "--fast needs --duration"
        )));
    }
    let design_file = a.design.design.clone();
    let inputs: Vec<&std::path::Path> = design_file.iter().map(|p| p.as_path()).collect();
    super::output::clear_for(&a.output, &inputs, a.force.force)?;
    interrupt_flag();
    let (spec, header) = source(&a)?;
    let path = a.output.display().to_string();
    let mut progress = Progress::new(Duration::from_secs(1));
    let mut s = Session::start(spec, header, None)?;
    s.start_recording(&a.output)?;
    // a port's duration is wall time; the virtual probe ends itself after its duration
    let deadline = a
        .duration
        .filter(|_| !sim)
        .map(|ns| Instant::now() + Duration::from_nanos(ns as u64));
    while !interrupted() && deadline.is_none_or(|d| Instant::now() < d) {
        match s.next_within(Duration::from_millis(20)) {
            Next::Event(Event::Lost { reason }) => {
                progress.break_line();
                eprintln!("link lost: {reason}; recording goes on when it returns")
            }
            Next::Event(Event::Refused { what, reason }) => {
                progress.break_line();
                eprintln!("probe refused {what}: {reason}")
            }
            Next::Event(Event::Failed(e)) => {
                progress.break_line();
                // a file that holds only its header (the probe never answered) is not kept
                if let Some(Ok((p, c))) = s.stop_recording()
                    && c.data_bytes == 0
                    && c.marks == 0
                {
                    let _ = std::fs::remove_file(p);
                }
                return Err(e.into());
            }
            Next::Event(Event::RecordingFailed(e)) => {
                progress.break_line();
                return Err(CliError::runtime(miette!(
                    help = "the file holds what was written before the failure; free space or choose another place with -o",
                    "recording stopped: {e}"
                )));
            }
            Next::Event(Event::End) | Next::Ended => break,
            Next::Event(_) | Next::Idle => {}
        }
        if progress.due()
            && let Some((_, c)) = s.recording()
        {
            let line = progress_line(&path, &s, c, Some(&mut progress));
            progress.show(&line);
        }
    }
    match s.stop_recording() {
        Some(Ok((_, counts))) => {
            let line = progress_line(&path, &s, counts, None);
            progress.finish(&line);
            Ok(Outcome::Done)
        }
        Some(Err(e)) => Err(e.into()),
        None => Err(CliError::runtime(miette!("{path}: the recording stopped"))),
    }
}

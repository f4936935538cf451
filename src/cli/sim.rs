//! `slackmeter sim`: the virtual probe on a pseudo-terminal, into a file or to standard output.

use super::output::outln;
use std::io::Write;
use std::path::PathBuf;
use std::time::Instant;

use miette::miette;

use super::args::{self, SimModelArgs};
use super::design::DesignArgs;
use super::error::{CliError, CliResult, Outcome};
use super::model::build_model;
use super::signal::{interrupt_flag, interrupted};
use crate::sim::SimProbe;
use crate::sim::pty::PtyServer;
use crate::units;

/// Options of the virtual probe and its outputs.
#[derive(clap::Args, Debug, Clone)]
pub struct SimArgs {
    /// What the virtual probe simulates.
    #[command(flatten)]
    pub model: SimModelArgs,
    /// The design --fault-on-typ fails by.
    #[command(flatten)]
    pub design: DesignArgs,
    /// Serve the protocol on a new pseudo-terminal and print its device path (the default output).
    #[arg(long)]
    pub pty: bool,
    /// With --pty: also point this symlink at the device (a restarted sim reuses the same path).
    #[arg(long, value_name = "PATH")]
    pub link: Option<PathBuf>,
    /// Write the frames straight to a file (as fast as possible).
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Overwriting (with --out).
    #[command(flatten)]
    pub force: super::output::ForceArgs,
    /// Write the frames to standard output.
    #[arg(long)]
    pub stdout: bool,
    /// How long to simulate, e.g. 10s (files and stdout default to 10 s; a pty runs until Ctrl-C).
    #[arg(long, value_parser = args::pos_time)]
    pub duration: Option<f64>,
}

/// `slackmeter sim`.
pub fn run(a: SimArgs) -> CliResult<Outcome> {
    let lib = a.design.library()?;
    let design = a.design.or_demo(&lib)?;
    let setup = build_model(&a.model, &design, &lib)?;
    let outputs = a.pty as u8 + a.out.is_some() as u8 + a.stdout as u8;
    if outputs > 1 {
        return Err(CliError::input(miette!(
            help = "choose one of --pty, --out FILE, --stdout",
            "more than one output given"
        )));
    }
    if a.stdout {
        super::output::refuse_binary_terminal(
            "the probe's frame stream",
            "send it into a file or a program: `slackmeter sim --stdout > run.bin`, `slackmeter sim --stdout | ...`, or use --out FILE",
        )?;
    }
    interrupt_flag();
    let mut probe = SimProbe::new(setup.model, setup.notes);
    if a.out.is_some() || a.stdout {
        return to_file(&a, &mut probe);
    }
    let mut server = PtyServer::open(a.link.as_deref()).map_err(|e| {
        if e.kind() == std::io::ErrorKind::AlreadyExists {
            return CliError::input(miette!(
                help = "choose another --link path, or move that file away first",
                "--link: {e}"
            ));
        }
        CliError::runtime(miette!(
            help = "pseudo-terminals need /dev/ptmx (Linux, macOS)",
            "cannot create a pseudo-terminal: {e}"
        ))
    })?;
    let m = probe.model();
    outln!("virtual probe on {}", server.path().display());
    if a.link.is_some() {
        outln!("  (device {})", server.device_path().display());
    }
    outln!(
        "  scenario {}: clock {} at {:.1} % duty, tick {}, rails {}",
        a.model.scenario,
        units::hz(m.freq_hz),
        m.duty * 100.0,
        units::ns(m.tick_ns),
        m.rails
            .iter()
            .map(|r| format!("{} {:.3} V", r.name, r.nominal_mv / 1000.0))
            .collect::<Vec<_>>()
            .join(", ")
    );
    outln!(
        "  connect with: slackmeter listen {}    (Ctrl-C stops the probe)",
        server.path().display()
    );
    let _ = std::io::stdout().flush();
    let stats = server
        .serve(&mut probe, interrupt_flag(), a.duration.map(|ns| ns * 1e-9))
        .map_err(|e| {
            CliError::runtime(miette!("the virtual probe's pseudo-terminal failed: {e}"))
        })?;
    eprintln!(
        "virtual probe stopped after {:.1} s: {} bytes sent, {} frames dropped for a slow host",
        stats.sim_s, stats.bytes, stats.dropped_frames
    );
    if stats.unsent_bytes > 0 {
        eprintln!(
            "  {} bytes were never taken by a host (is anything reading the device?)",
            stats.unsent_bytes
        );
    }
    Ok(Outcome::Done)
}

/// The frames as fast as possible into `--out` or standard output.
fn to_file(a: &SimArgs, probe: &mut SimProbe) -> CliResult<Outcome> {
    let end_ns = a.duration.unwrap_or(10e9);
    probe.start();
    let started = Instant::now();
    let mut bytes = 0u64;
    let what = a
        .out
        .as_ref()
        .map_or("standard output".to_string(), |p| p.display().to_string());
    let mut sink: Box<dyn Write> = match &a.out {
        Some(p) => Box::new(std::io::BufWriter::with_capacity(
            1 << 20,
            super::output::create(p, &[], a.force.force)?,
        )),
        None => Box::new(std::io::BufWriter::with_capacity(
            1 << 20,
            std::io::stdout().lock(),
        )),
    };
    while probe.now_ns() < end_ns && !interrupted() {
        // 10 ms of simulated time per slice: at the fastest clock the tick allows (62.5 MHz at
        // 8 ns) about a million edges, so Ctrl-C or SIGTERM is seen within a fraction of a second
        let next = (probe.now_ns() + 10e6).min(end_ns);
        probe.run_until(next);
        if probe.now_ns() >= end_ns {
            probe.flush_all();
        }
        let out = probe.output();
        bytes += out.len() as u64;
        sink.write_all(out).map_err(CliError::io(&what))?;
        out.clear();
    }
    sink.flush().map_err(CliError::io(&what))?;
    if a.out.is_some() {
        let secs = started.elapsed().as_secs_f64();
        eprintln!(
            "wrote {} edges in {:.1} s of simulated time: {} bytes in {:.2} s ({:.1} M edges/s)",
            probe.edges_sent,
            probe.now_ns() * 1e-9,
            bytes,
            secs,
            probe.edges_sent as f64 / secs / 1e6
        );
    }
    Ok(Outcome::Done)
}

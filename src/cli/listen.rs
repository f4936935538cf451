//! `slackmeter listen PORT`: handshake, the probe's self-description, then a running count of
//! what it sends with the recent window's figures.

use super::output::{Progress, count, outln};
use std::path::PathBuf;
use std::time::{Duration, Instant};

use super::args::{self, PortArgs};
use super::error::{CliResult, Outcome};
use super::signal::{interrupt_flag, interrupted};
use crate::measure::{EngineConfig, Window};
use crate::probe::ProbeDesc;
use crate::session::{self, Event, Next, Session, SourceSpec};
use crate::units;

/// Options of `listen`.
#[derive(clap::Args, Debug)]
pub struct ListenArgs {
    /// Serial device of the probe, e.g. /dev/ttyUSB0 or the path `sim --pty` printed.
    pub port: PathBuf,
    /// The port's options.
    #[command(flatten)]
    pub port_options: PortArgs,
    /// Stop after this long, e.g. 10s.
    #[arg(long, value_parser = args::pos_time)]
    pub duration: Option<f64>,
    /// Give up when the device goes away instead of waiting for it to return.
    #[arg(long)]
    pub no_reconnect: bool,
}

fn print_probe(probe: &ProbeDesc) -> CliResult<()> {
    outln!(
        "connected: {} (protocol {}), tick {} ({}/{} Hz), {} channels:",
        probe.firmware,
        probe.protocol_version,
        units::ns(probe.tick_ns),
        probe.tick_num_hz,
        probe.tick_den,
        probe.channels.len()
    );
    for c in &probe.channels {
        outln!("  {:>3} {:<6} {}", c.id, c.kind, c.label);
    }
    Ok(())
}

/// The running count: the link's state, the counters, and the recent window's figures.
fn progress(s: &Session, state: &str, reconnects: u32, p: &mut Progress) -> String {
    let c = s.counters();
    let t = s.tally();
    let secs = s.elapsed_s();
    let (bytes_per_s, _) = p.rates(secs, t.bytes, c.frames);
    let snap = s.engine().map(|e| e.snapshot(Window::Recent));
    let clock = snap
        .as_ref()
        .and_then(|s| s.clock())
        .map_or(String::new(), |k| {
            let f = k
                .frequency_hz
                .map_or("—".into(), |f| units::hz(f).to_string());
            let min = |v: Option<f64>| v.map_or("—".into(), |x| units::ns(x).to_string());
            format!(
                " | {} f {f}, duty {}, worst high {}, worst low {}",
                k.label,
                k.duty.map_or("—".into(), |d| format!("{:.2} %", d * 100.0)),
                min(k.high_min_ns),
                min(k.low_min_ns)
            )
        });
    let rail = snap
        .as_ref()
        .and_then(|s| s.worst_rail.as_ref())
        .map_or(String::new(), |(n, mv)| {
            format!(", lowest rail {n} {:.3} V", mv / 1000.0)
        });
    format!(
        "{state}: {:.0} s, {} frames, {:.2} MB/s, {} edges, lost {}, {}, {}{clock}{rail}",
        secs,
        c.frames,
        bytes_per_s / 1e6,
        t.edges,
        count(c.lost_frames, "frame"),
        count(c.crc_errors, "CRC error"),
        count(reconnects, "reconnect")
    )
}

/// `slackmeter listen`.
pub fn run(a: ListenArgs) -> CliResult<Outcome> {
    interrupt_flag();
    let mut cfg = a.port_options.link_config(&a.port);
    cfg.reconnect = !a.no_reconnect;
    let header = session::header(a.port.display().to_string(), vec![], None, None);
    let mut s = Session::start(SourceSpec::Port(cfg), header, Some(EngineConfig::default()))?;
    let deadline = a.duration.map(|ns| Duration::from_nanos(ns as u64));
    let started = Instant::now();
    let mut bar = Progress::new(Duration::from_millis(500));
    let mut reconnects = 0;
    let mut state = "connecting".to_string();
    loop {
        if interrupted() || deadline.is_some_and(|d| started.elapsed() >= d) {
            break;
        }
        match s.next_within(Duration::from_millis(10)) {
            Next::Event(Event::Connected {
                probe,
                reconnects: r,
            }) => {
                reconnects = r;
                state = "streaming".into();
                bar.break_line();
                print_probe(&probe)?;
            }
            Next::Event(Event::Lost { reason }) => {
                bar.break_line();
                eprintln!("link lost: {reason}; waiting for the device to return");
                state = format!("lost: {reason}");
            }
            Next::Event(Event::Retrying { retry_in, .. }) => {
                if !state.starts_with("lost") {
                    state = format!("retrying in {} ms", retry_in.as_millis());
                }
            }
            Next::Event(Event::Refused { what, reason }) => {
                bar.break_line();
                eprintln!("probe refused {what}: {reason}")
            }
            Next::Event(Event::Failed(e)) => {
                bar.break_line();
                return Err(e.into());
            }
            Next::Ended => break,
            Next::Event(_) | Next::Idle => {}
        }
        if bar.due() {
            let line = progress(&s, &state, reconnects, &mut bar);
            bar.show(&line);
        }
    }
    bar.break_line();
    let c = s.counters();
    let t = s.tally();
    outln!(
        "received {} frames ({} bytes): {} edges, {} line events, {} samples; {} lost, {}, {}",
        c.frames,
        t.bytes,
        t.edges,
        t.line_events,
        t.samples,
        count(c.lost_frames, "frame"),
        count(c.crc_errors, "CRC error"),
        count(reconnects, "reconnect")
    );
    Ok(Outcome::Done)
}

//! Command-line edge for the probe side: `sim`, `ports`, `listen`.

use std::io::Write;
use std::path::PathBuf;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use firmware_protocol::{Message, StreamDecoder, types};
use miette::{IntoDiagnostic, Result, miette};

use crate::budget::{self, Corner, Design, Library, OperatingPoint};
use crate::link::{self, Link, LinkConfig, LinkEvent};
use crate::measure::{EngineConfig, Feed, Window};
use crate::sim::{BenchModel, FaultLimit, RailModel, SimProbe, Sweep};
use crate::units;

static INTERRUPTED: AtomicBool = AtomicBool::new(false);

extern "C" fn on_interrupt(_: libc::c_int) {
    INTERRUPTED.store(true, Ordering::SeqCst);
}

/// Set a flag on Ctrl-C / SIGTERM instead of dying, so outputs are flushed and closed.
pub fn interrupt_flag() -> &'static AtomicBool {
    // SAFETY: installing a handler that only stores to an atomic is async-signal-safe.
    unsafe {
        libc::signal(
            libc::SIGINT,
            on_interrupt as *const () as libc::sighandler_t,
        );
        libc::signal(
            libc::SIGTERM,
            on_interrupt as *const () as libc::sighandler_t,
        );
    }
    &INTERRUPTED
}

/// Options of the virtual probe and its outputs.
#[derive(clap::Args, Debug, Clone)]
pub struct SimArgs {
    /// What the virtual probe simulates.
    #[command(flatten)]
    pub model: SimModelArgs,
    /// Serve the protocol on a new pseudo-terminal and print its device path (the default output).
    #[arg(long)]
    pub pty: bool,
    /// With --pty: also point this symlink at the device (a restarted sim reuses the same path).
    #[arg(long, value_name = "PATH")]
    pub link: Option<PathBuf>,
    /// Write the frames straight to a file (as fast as possible).
    #[arg(long, value_name = "FILE")]
    pub out: Option<PathBuf>,
    /// Write the frames to standard output.
    #[arg(long)]
    pub stdout: bool,
    /// How long to simulate, e.g. 10s (files and stdout default to 10 s; a pty runs until Ctrl-C).
    #[arg(long, value_parser = pos_time)]
    pub duration: Option<f64>,
}

/// What the virtual probe simulates (shared by `sim`, `record --sim` and `watch --sim`).
#[derive(clap::Args, Debug, Clone)]
pub struct SimModelArgs {
    /// Built-in scenario of the demo machine: steady, sagging, sweep (flags below override it).
    #[arg(long, default_value = "steady")]
    pub scenario: String,
    /// Clock frequency, e.g. 1.5MHz.
    #[arg(long, value_parser = pos_freq)]
    pub freq: Option<f64>,
    /// Duty cycle (high fraction): 0.3 or 30%.
    #[arg(long, value_parser = duty)]
    pub duty: Option<f64>,
    /// RMS period jitter (successive periods independent), e.g. 2ns.
    #[arg(long, value_parser = time)]
    pub jitter: Option<f64>,
    /// Slow sinusoidal frequency drift amplitude in ppm (period 60 s).
    #[arg(long)]
    pub drift_ppm: Option<f64>,
    /// Probe tick, e.g. 8ns or 62.5ns.
    #[arg(long, value_parser = pos_time)]
    pub tick: Option<f64>,
    /// Mean rate of glitches (short extra pulses), e.g. 5Hz.
    #[arg(long, value_parser = freq)]
    pub glitch_rate: Option<f64>,
    /// Width of a glitch, e.g. 10ns.
    #[arg(long, value_parser = pos_time)]
    pub glitch_width: Option<f64>,
    /// Mean rate of stalls (the clock stops for --stall-periods periods), e.g. 0.5Hz.
    #[arg(long, value_parser = freq)]
    pub stall_rate: Option<f64>,
    /// Length of a stall in clock periods.
    #[arg(long)]
    pub stall_periods: Option<f64>,
    /// A rail: NAME=VOLTAGE[,ripple=20mV][,noise=5mV][,sag-rate=2Hz][,sag-depth=300mV][,sag-time=20ms]
    /// (repeatable; replaces the scenario's rails).
    #[arg(long, value_name = "NAME=V[,...]", value_parser = rail)]
    pub rail: Vec<RailModel>,
    /// Heartbeat rate of the machine's self-test loop, e.g. 2Hz.
    #[arg(long, value_parser = freq)]
    pub heartbeat: Option<f64>,
    /// A reset pulse every this long, e.g. 10s (clears a fault).
    #[arg(long, value_parser = pos_time)]
    pub reset_every: Option<f64>,
    /// Sweep the clock frequency, e.g. 1MHz..6MHz (with --over).
    #[arg(long, value_name = "FROM..TO", value_parser = freq_range)]
    pub sweep: Option<(f64, f64)>,
    /// Duration of the sweep ramp, e.g. 30s.
    #[arg(long, value_parser = pos_time)]
    pub over: Option<f64>,
    /// Raise the fault line (and stop the heartbeat) when the clock breaks the design's typical
    /// timing at the lowest simulated rail.
    #[arg(long)]
    pub fault_on_typ: bool,
    /// Design for --fault-on-typ (the built-in demo design by default).
    #[arg(long)]
    pub design: Option<PathBuf>,
    /// Temperature for --fault-on-typ.
    #[arg(long, value_parser = temp, default_value = "25")]
    pub temp: f64,
    /// Seed of every random stream.
    #[arg(long)]
    pub seed: Option<u64>,
    /// Stamp edges in bursts: N consecutive edges every T, e.g. 4000/100ms (as a small probe
    /// does; the gaps are flagged as sampling, not loss).
    #[arg(long, value_name = "N/T", value_parser = bursts)]
    pub bursts: Option<(u32, f64)>,
    /// Analog sample rate per rail, e.g. 1kHz (default 10 kHz).
    #[arg(long, value_parser = pos_freq)]
    pub analog_rate: Option<f64>,
}

fn bursts(s: &str) -> Result<(u32, f64), String> {
    let (n, t) = s
        .split_once('/')
        .ok_or_else(|| format!("\"{s}\" is not N/T, e.g. 4000/100ms"))?;
    let n: u32 = n
        .trim()
        .parse()
        .map_err(|_| format!("\"{n}\" is not a whole number of edges"))?;
    if n < 4 {
        return Err("a burst needs at least 4 edges".into());
    }
    Ok((n, pos_time(t)?))
}

fn freq(s: &str) -> Result<f64, String> {
    units::parse_freq_hz(s).map_err(|e| e.to_string())
}
fn pos_freq(s: &str) -> Result<f64, String> {
    let f = freq(s)?;
    if f > 0.0 {
        Ok(f)
    } else {
        Err("must be positive".into())
    }
}
fn time(s: &str) -> Result<f64, String> {
    units::parse_time_ns(s).map_err(|e| e.to_string())
}
pub(crate) fn pos_time(s: &str) -> Result<f64, String> {
    let t = time(s)?;
    if t > 0.0 {
        Ok(t)
    } else {
        Err("must be positive".into())
    }
}
/// The virtual machine's failure rule: the design's typical budget over 3–6 V at `temp_c`.
pub fn typical_fault_limit(design: &Design, lib: &Library, temp_c: f64) -> FaultLimit {
    let mut op = OperatingPoint::of(design);
    op.corner = Corner::Typ;
    op.temp_c = temp_c;
    let by_vcc = budget::sweep_vcc(design, lib, &op, 3.0, 6.0, 151)
        .into_iter()
        .map(|p| {
            (
                p.vcc_v,
                p.low_required_ns,
                p.high_required_ns,
                p.period_required_ns,
            )
        })
        .collect();
    FaultLimit {
        by_vcc,
        source: format!("typical budget of {} at {temp_c} °C", design.name),
    }
}

/// Settings a probe takes with CONFIGURE (PROTOCOL.md §5.8), by the names `--set` uses.
const SETTINGS: [(&str, u8); 8] = [
    ("enable", firmware_protocol::params::ENABLE),
    ("edge-mode", firmware_protocol::params::EDGE_MODE),
    ("gate", firmware_protocol::params::GATE_TICKS),
    (
        "sample-interval",
        firmware_protocol::params::SAMPLE_INTERVAL_TICKS,
    ),
    ("duty-samples", firmware_protocol::params::DUTY_SAMPLES),
    ("cal-scale", firmware_protocol::params::CAL_SCALE_NUM_UV),
    ("cal-offset", firmware_protocol::params::CAL_OFFSET_UV),
    (
        "status-interval",
        firmware_protocol::params::STATUS_INTERVAL_MS,
    ),
];

/// `CHANNEL:NAME=VALUE` (channel a number or `probe`) into a CONFIGURE command.
pub(crate) fn probe_setting(s: &str) -> Result<firmware_protocol::Configure, String> {
    let form = "write CHANNEL:NAME=VALUE, e.g. 0:edge-mode=timestamps or 8:cal-scale=6622417";
    let (ch, rest) = s
        .split_once(':')
        .ok_or(format!("no ':' in {s:?}: {form}"))?;
    let (name, value) = rest
        .split_once('=')
        .ok_or(format!("no '=' in {s:?}: {form}"))?;
    let channel = match ch.trim() {
        "probe" => firmware_protocol::params::PROBE,
        c => c
            .parse::<u8>()
            .map_err(|_| format!("channel {c:?} is not a channel id (0…254) or `probe`: {form}"))?,
    };
    let names = SETTINGS.map(|(n, _)| n).join(", ");
    let param = SETTINGS
        .iter()
        .find(|(n, _)| *n == name.trim())
        .map(|(_, p)| *p)
        .ok_or(format!(
            "unknown setting {name:?}; the settings are: {names}"
        ))?;
    let v = value.trim();
    let value = match (name.trim(), v) {
        ("edge-mode", "timestamps") => 0,
        ("edge-mode", "count") => 1,
        ("edge-mode", "both") => 2,
        ("enable", "on") => 1,
        ("enable", "off") => 0,
        ("cal-offset", _) => v
            .parse::<i32>()
            .map(|x| x as u32)
            .map_err(|_| format!("{v:?} is not a whole number of µV for cal-offset"))?,
        (n, _) => v.parse::<u32>().map_err(|_| {
            let hint = match n {
                "edge-mode" => " (timestamps, count or both)",
                "enable" => " (on or off)",
                "gate" | "sample-interval" => " (in the probe's ticks)",
                "status-interval" => " (in ms)",
                _ => "",
            };
            format!("{v:?} is not a value for {n}{hint}")
        })?,
    };
    Ok(firmware_protocol::Configure {
        channel,
        param,
        value,
    })
}

fn duty(s: &str) -> Result<f64, String> {
    units::parse_duty(s).map_err(|e| e.to_string())
}
fn temp(s: &str) -> Result<f64, String> {
    units::parse_temp_c(s).map_err(|e| e.to_string())
}

/// A temperature argument.
pub(crate) fn temp_arg(s: &str) -> Result<f64, String> {
    temp(s)
}

/// A fraction given as "0.2" or "20%" (0 allowed).
pub(crate) fn fraction(s: &str) -> Result<f64, String> {
    let t = s.trim();
    let v = match t.strip_suffix('%') {
        Some(p) => p.trim().parse::<f64>().map(|x| x / 100.0),
        None => t.parse::<f64>(),
    }
    .map_err(|_| format!("\"{s}\" is not a fraction: write 0.2 or 20%"))?;
    if (0.0..10.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("\"{s}\" is out of range"))
    }
}
fn freq_range(s: &str) -> Result<(f64, f64), String> {
    let (a, b) = s
        .split_once("..")
        .ok_or_else(|| format!("\"{s}\" is not FROM..TO, e.g. 1MHz..6MHz"))?;
    Ok((pos_freq(a)?, pos_freq(b)?))
}

/// Parse NAME=V[,key=value...].
pub fn rail(s: &str) -> Result<RailModel, String> {
    let mut parts = s.split(',');
    let head = parts.next().unwrap_or("");
    let (name, v) = head
        .split_once('=')
        .ok_or_else(|| format!("\"{head}\" is not NAME=VOLTAGE, e.g. VCC_FAR=4.85V"))?;
    let v = units::parse_voltage_v(v).map_err(|e| e.to_string())?;
    let mut r = RailModel::quiet(name.trim(), v * 1000.0);
    for p in parts {
        let (k, val) = p
            .split_once('=')
            .ok_or_else(|| format!("\"{p}\" is not key=value"))?;
        let mv = |x: &str| {
            units::parse_voltage_v(x)
                .map(|v| v * 1000.0)
                .map_err(|e| e.to_string())
        };
        match k.trim() {
            "ripple" => r.ripple_mv = mv(val)?,
            "ripple-freq" => r.ripple_hz = freq(val)?,
            "noise" => r.noise_mv = mv(val)?,
            "sag-rate" => r.sag_rate_hz = freq(val)?,
            "sag-depth" => r.sag_depth_mv = mv(val)?,
            "sag-time" => r.sag_ms = time(val)? / 1e6,
            other => {
                return Err(format!(
                    "unknown rail setting \"{other}\": use ripple, ripple-freq, noise, sag-rate, sag-depth, sag-time"
                ));
            }
        }
    }
    Ok(r)
}

/// The bench model and the LOG notes the sim sends, from the command line.
pub fn build_model(a: &SimModelArgs) -> Result<(BenchModel, Vec<String>)> {
    let mut m = BenchModel::scenario(&a.scenario).ok_or_else(|| {
        miette!(
            help = format!("scenarios: {}", BenchModel::SCENARIOS.join(", ")),
            "unknown scenario \"{}\"",
            a.scenario
        )
    })?;
    if let Some(f) = a.freq {
        m.freq_hz = f;
    }
    if let Some(d) = a.duty {
        m.duty = d;
    }
    if let Some(j) = a.jitter {
        m.jitter_rms_ns = j;
    }
    if let Some(p) = a.drift_ppm {
        m.drift_ppm = p;
    }
    if let Some(t) = a.tick {
        m.tick_ns = t;
    }
    if let Some(r) = a.glitch_rate {
        m.glitch_rate_hz = r;
    }
    if let Some(w) = a.glitch_width {
        m.glitch_width_ns = w;
    }
    if let Some(r) = a.stall_rate {
        m.stall_rate_hz = r;
    }
    if let Some(n) = a.stall_periods {
        m.stall_periods = n;
    }
    if !a.rail.is_empty() {
        m.rails = a.rail.clone();
    }
    if let Some(h) = a.heartbeat {
        m.heartbeat_hz = h;
    }
    if let Some(r) = a.reset_every {
        m.reset_interval_s = Some(r * 1e-9);
    }
    if let Some(s) = a.seed {
        m.seed = s;
    }
    if let Some((n, every_ns)) = a.bursts {
        m.burst_edges = Some(n);
        m.burst_every_s = every_ns * 1e-9;
    }
    if let Some(r) = a.analog_rate {
        m.analog_rate_hz = r;
    }
    match (a.sweep, a.over) {
        (Some((from, to)), over) => {
            m.sweep = Some(Sweep {
                from_hz: from,
                to_hz: to,
                over_s: over.map_or(30.0, |ns| ns * 1e-9),
            });
            m.freq_hz = from;
        }
        (None, Some(over)) => match &mut m.sweep {
            Some(s) => s.over_s = over * 1e-9,
            None => {
                return Err(miette!(
                    help = "add --sweep FROM..TO",
                    "--over needs --sweep"
                ));
            }
        },
        (None, None) => {}
    }
    let mut notes = Vec::new();
    if a.fault_on_typ {
        let lib = Library::builtin();
        let design = match &a.design {
            Some(p) => Design::load(p, &lib).map_err(miette::Report::new)?,
            None => Design::demo(&lib),
        };
        notes.push(format!(
            "sim-design {} ({}, {} bytes, crc32 {:08x})",
            design.name,
            design.source.name,
            design.source.text.len(),
            firmware_protocol::crc32(design.source.text.as_bytes())
        ));
        m.fault = Some(typical_fault_limit(&design, &lib, a.temp));
    }
    m.validate().map_err(|e| miette!("{e}"))?;
    let mut shown = m.clone();
    if let Some(f) = &mut shown.fault {
        f.by_vcc.clear(); // the table is long; the design note names its source
    }
    notes.insert(0, format!("sim-scenario {}", a.scenario));
    notes.push(format!(
        "sim-params {}",
        serde_json::to_string(&shown).into_diagnostic()?
    ));
    Ok((m, notes))
}

/// `slackmeter sim`.
pub fn sim_cmd(a: SimArgs) -> Result<i32> {
    let (model, notes) = build_model(&a.model)?;
    let outputs = a.pty as u8 + a.out.is_some() as u8 + a.stdout as u8;
    if outputs > 1 {
        return Err(miette!(
            help = "choose one of --pty, --out FILE, --stdout",
            "more than one output given"
        ));
    }
    let stop = interrupt_flag();
    let mut probe = SimProbe::new(model, notes);
    if a.out.is_some() || a.stdout {
        let duration_s = a.duration.map_or(10.0, |ns| ns * 1e-9);
        probe.start();
        let started = Instant::now();
        let mut bytes = 0u64;
        let mut sink: Box<dyn Write> = match &a.out {
            Some(p) => Box::new(std::io::BufWriter::with_capacity(
                1 << 20,
                std::fs::File::create(p)
                    .map_err(|e| miette!("cannot create {}: {e}", p.display()))?,
            )),
            None => Box::new(std::io::BufWriter::with_capacity(
                1 << 20,
                std::io::stdout().lock(),
            )),
        };
        let end_ns = duration_s * 1e9;
        while probe.now_ns() < end_ns && !stop.load(Ordering::Relaxed) {
            let next = (probe.now_ns() + 100e6).min(end_ns);
            probe.run_until(next);
            if probe.now_ns() >= end_ns {
                probe.flush_all();
            }
            let out = probe.output();
            bytes += out.len() as u64;
            sink.write_all(out).into_diagnostic()?;
            out.clear();
        }
        sink.flush().into_diagnostic()?;
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
        return Ok(crate::cli::EXIT_OK);
    }
    let mut server = crate::sim::pty::PtyServer::open(a.link.as_deref()).map_err(|e| {
        miette!(
            help = "pseudo-terminals need /dev/ptmx (Linux, macOS)",
            "cannot create a pseudo-terminal: {e}"
        )
    })?;
    let m = probe.model();
    println!("virtual probe on {}", server.path().display());
    if a.link.is_some() {
        println!("  (device {})", server.device_path().display());
    }
    println!(
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
    println!(
        "  connect with: slackmeter listen {}    (Ctrl-C stops the probe)",
        server.path().display()
    );
    let _ = std::io::stdout().flush();
    let stats = server
        .serve(&mut probe, stop, a.duration.map(|ns| ns * 1e-9))
        .into_diagnostic()?;
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
    Ok(crate::cli::EXIT_OK)
}

/// `slackmeter ports`.
pub fn ports_cmd() -> Result<i32> {
    let ports = link::list_ports();
    if ports.is_empty() {
        println!(
            "no serial ports found (a virtual probe's pseudo-terminal is not listed: `slackmeter sim --pty` prints its path)"
        );
    }
    for (name, what) in ports {
        println!("{name}  {what}");
    }
    Ok(crate::cli::EXIT_OK)
}

/// Options of `listen`.
#[derive(clap::Args, Debug)]
pub struct ListenArgs {
    /// Serial device of the probe, e.g. /dev/ttyUSB0 or the path `sim --pty` printed.
    pub port: PathBuf,
    /// Baud rate (pseudo-terminals and USB-CDC ignore it).
    #[arg(long, default_value_t = 1_000_000)]
    pub baud: u32,
    /// Stop after this long, e.g. 10s.
    #[arg(long, value_parser = pos_time)]
    pub duration: Option<f64>,
    /// Give up when the device goes away instead of waiting for it to return.
    #[arg(long)]
    pub no_reconnect: bool,
    /// A probe setting sent before streaming starts, CHANNEL:NAME=VALUE (repeatable): enable,
    /// edge-mode (timestamps, count, both), gate and sample-interval (probe ticks),
    /// duty-samples, cal-scale, cal-offset (µV), status-interval (ms); channel `probe` for all.
    #[arg(long = "set", value_name = "CH:NAME=VALUE", value_parser = probe_setting)]
    pub settings: Vec<firmware_protocol::Configure>,
}

/// A real probe's port options, shared by `record` and `watch` (both also have `--sim`).
#[derive(clap::Args, Debug, Clone)]
pub struct PortArgs {
    /// Baud rate of the port.
    #[arg(long, default_value_t = 1_000_000)]
    pub baud: u32,
    /// A probe setting sent before streaming starts, CHANNEL:NAME=VALUE (repeatable; see
    /// `slackmeter listen --help`; not with --sim, whose settings are its own flags).
    #[arg(long = "set", value_name = "CH:NAME=VALUE", value_parser = probe_setting, conflicts_with = "sim")]
    pub settings: Vec<firmware_protocol::Configure>,
}

impl PortArgs {
    /// The link to the probe on `port` with these options.
    pub fn link_config(&self, port: impl Into<PathBuf>) -> LinkConfig {
        let mut cfg = LinkConfig::new(port);
        cfg.baud = self.baud;
        cfg.configure = self.settings.clone();
        cfg
    }
}

/// `slackmeter listen PORT`: handshake, then a running count of what the probe sends.
pub fn listen_cmd(a: ListenArgs) -> Result<i32> {
    let stop = interrupt_flag();
    let mut cfg = LinkConfig::new(&a.port);
    cfg.baud = a.baud;
    cfg.reconnect = !a.no_reconnect;
    cfg.configure = a.settings.clone();
    let mut link = Link::start(cfg, 256);
    let started = Instant::now();
    let deadline = a
        .duration
        .map(|ns| started + Duration::from_nanos(ns as u64));
    let mut decoder = StreamDecoder::new();
    let mut feed = Feed::new(EngineConfig::default());
    let (mut edges, mut samples, mut line_events, mut bytes) = (0u64, 0u64, 0u64, 0u64);
    let mut last_print = Instant::now();
    let mut reconnects = 0;
    let mut state = "connecting".to_string();
    loop {
        if stop.load(Ordering::Relaxed) || deadline.is_some_and(|d| Instant::now() >= d) {
            break;
        }
        let ev = match link.events.try_recv() {
            Ok(ev) => Some(ev),
            Err(tokio::sync::mpsc::error::TryRecvError::Empty) => {
                std::thread::sleep(Duration::from_millis(10));
                None
            }
            Err(_) => break,
        };
        match ev {
            Some(LinkEvent::Data { bytes: b, .. }) => {
                bytes += b.len() as u64;
                feed.push(&b);
                decoder.push(&b, |f| match f.header.msg_type {
                    types::EDGES | types::LINES => {
                        if let Ok(Message::Edges(e) | Message::Lines(e)) = Message::decode(&f) {
                            if f.header.msg_type == types::EDGES {
                                edges += u64::from(e.count);
                            } else {
                                line_events += u64::from(e.count);
                            }
                        }
                    }
                    types::ANALOG => {
                        if let Ok(Message::Analog(an)) = Message::decode(&f) {
                            samples += an.count() as u64;
                        }
                    }
                    _ => {}
                });
            }
            Some(LinkEvent::Connected {
                probe,
                reconnects: r,
            }) => {
                reconnects = r;
                state = "streaming".into();
                eprintln!();
                println!(
                    "connected: {} (protocol {}), tick {} ({}/{} Hz), {} channels:",
                    probe.firmware,
                    probe.protocol_version,
                    units::ns(probe.tick_ns),
                    probe.tick_num_hz,
                    probe.tick_den,
                    probe.channels.len()
                );
                for c in &probe.channels {
                    println!("  {:>3} {:<6} {}", c.id, c.kind, c.label);
                }
                decoder.reset_sequence();
                if r > 0 {
                    feed.note_reconnect();
                }
            }
            Some(LinkEvent::Lost { reason }) => {
                state = format!("lost: {reason}");
                eprintln!("\nlink lost: {reason}; waiting for the device to return");
            }
            Some(LinkEvent::Retrying { retry_in, .. }) => {
                if !state.starts_with("lost") {
                    state = format!("retrying in {} ms", retry_in.as_millis());
                }
            }
            Some(LinkEvent::Refused { what, reason }) => {
                eprintln!("\nprobe refused {what}: {reason}")
            }
            Some(LinkEvent::Failed(e)) => {
                eprintln!();
                return Err(miette::Report::new(e));
            }
            Some(LinkEvent::Connecting { .. }) | None => {}
        }
        if last_print.elapsed() >= Duration::from_millis(500) {
            last_print = Instant::now();
            let c = decoder.counters;
            let secs = started.elapsed().as_secs_f64();
            let snap = feed.engine.snapshot(Window::Recent);
            let clock = snap.clock().map_or(String::new(), |k| {
                let f = k
                    .frequency_hz
                    .map_or("—".into(), |f| units::hz(f).to_string());
                let min = |v: Option<f64>| v.map_or("—".into(), |x| units::ns(x).to_string());
                format!(
                    " | {} f {f}, duty {}, min high {}, min low {}",
                    k.label,
                    k.duty.map_or("—".into(), |d| format!("{:.2} %", d * 100.0)),
                    min(k.high_min_ns),
                    min(k.low_min_ns)
                )
            });
            let rail = snap.worst_rail.as_ref().map_or(String::new(), |(n, mv)| {
                format!(", lowest rail {n} {:.3} V", mv / 1000.0)
            });
            eprint!(
                "\r{state}: {:.0} s, {} frames, {:.2} MB/s, {} edges, lost {} frames, {} CRC errors, {} reconnects{clock}{rail}   ",
                secs,
                c.frames,
                bytes as f64 / 1e6 / secs.max(1e-9),
                edges,
                c.lost_frames,
                c.crc_errors,
                reconnects
            );
        }
    }
    eprintln!();
    let c = decoder.counters;
    println!(
        "received {} frames ({} bytes): {} edges, {} line events, {} samples; {} lost frames, {} CRC errors, {} reconnects",
        c.frames, bytes, edges, line_events, samples, c.lost_frames, c.crc_errors, reconnects
    );
    link.events.close();
    Ok(crate::cli::EXIT_OK)
}

#[cfg(test)]
mod setting_tests {
    use super::probe_setting;
    use firmware_protocol::params;

    #[test]
    fn settings_parse_by_name_and_value() {
        let c = probe_setting("0:edge-mode=timestamps").unwrap();
        assert_eq!((c.channel, c.param, c.value), (0, params::EDGE_MODE, 0));
        let c = probe_setting("probe:gate=800000").unwrap();
        assert_eq!(
            (c.channel, c.param, c.value),
            (params::PROBE, params::GATE_TICKS, 800_000)
        );
        let c = probe_setting("9:cal-offset=-1500").unwrap();
        assert_eq!((c.param, c.value as i32), (params::CAL_OFFSET_UV, -1500));
        let c = probe_setting("2:enable=off").unwrap();
        assert_eq!((c.param, c.value), (params::ENABLE, 0));
    }

    #[test]
    fn bad_settings_say_what_and_how() {
        for (s, want) in [
            ("0edge-mode=1", "no ':'"),
            ("0:edge-mode", "no '='"),
            ("x:gate=1", "not a channel id"),
            ("0:speed=1", "the settings are: enable, edge-mode"),
            ("0:gate=1ms", "in the probe's ticks"),
            ("0:edge-mode=fast", "timestamps, count or both"),
            ("8:cal-offset=1.5", "whole number of µV"),
        ] {
            let e = probe_setting(s).unwrap_err();
            assert!(e.contains(want), "{s}: {e}");
        }
    }
}

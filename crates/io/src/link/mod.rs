//! The serial link to a probe: open a port, handshake, configure, stream, survive unplugging.
//!
//! The only module that touches the `serialport` crate. A reader thread owns the blocking port
//! and sends [`LinkEvent`]s into a bounded tokio channel; every byte read after the port opens
//! is forwarded as received (with the host time), so a recorder can keep it and a replay can run
//! the very same bytes through the same decoder.

use std::io::{self, Read, Write};
use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

use firmware_protocol::{
    self as proto, Configure, MAX_WIRE, Message, StreamDecoder, results, types,
};
pub use slackmeter_core::probe::ProbeDesc;
use tokio::sync::mpsc;

/// How to reach the probe.
#[derive(Clone, Debug)]
pub struct LinkConfig {
    /// Device path, e.g. /dev/ttyUSB0 or a symlink.
    pub path: PathBuf,
    /// Baud rate (ignored by pseudo-terminals and USB-CDC).
    pub baud: u32,
    /// How long to wait for HELLO.
    pub hello_timeout: Duration,
    /// How long to wait for each ACK.
    pub ack_timeout: Duration,
    /// Commands sent after HELLO, before START.
    pub configure: Vec<Configure>,
    /// Keep trying when the device goes away.
    pub reconnect: bool,
    /// Pause between reconnection attempts.
    pub retry_every: Duration,
    /// No byte for this long while streaming counts as a lost link.
    pub silence: Duration,
}

impl LinkConfig {
    /// Defaults for a port path: 1 Mbaud, 2 s for HELLO, 500 ms per ACK, reconnecting.
    pub fn new(path: impl Into<PathBuf>) -> LinkConfig {
        LinkConfig {
            path: path.into(),
            baud: 1_000_000,
            hello_timeout: Duration::from_secs(2),
            ack_timeout: Duration::from_millis(500),
            configure: Vec::new(),
            reconnect: true,
            retry_every: Duration::from_millis(500),
            silence: Duration::from_secs(5),
        }
    }
}

/// Why the link could not be (re)established.
#[derive(Debug, Clone, thiserror::Error, miette::Diagnostic, PartialEq)]
pub enum LinkError {
    /// No device at that path.
    #[error("serial port {path} not found")]
    #[diagnostic(code(slackmeter::link::not_found), help("{hint}"))]
    NotFound {
        /// Path given.
        path: String,
        /// The ports there are.
        hint: String,
    },
    /// The OS refused access.
    #[error("permission denied opening {path}")]
    #[diagnostic(
        code(slackmeter::link::permission),
        help(
            "serial devices usually belong to the `dialout` group (Debian, Ubuntu; `uucp` on Arch): `sudo usermod -aG dialout $USER`, then log in again; or add a udev rule granting your user access"
        )
    )]
    Permission {
        /// Path given.
        path: String,
    },
    /// Some other failure opening the device.
    #[error("cannot open {path}: {reason}")]
    #[diagnostic(code(slackmeter::link::open))]
    Open {
        /// Path given.
        path: String,
        /// OS message.
        reason: String,
    },
    /// Valid frames arrived but no HELLO, or nothing at all.
    #[error("no probe answered on {path} within {timeout_ms} ms: {seen}")]
    #[diagnostic(code(slackmeter::link::not_a_probe), help("{hint}"))]
    NotAProbe {
        /// Path.
        path: String,
        /// Timeout.
        timeout_ms: u64,
        /// What was seen.
        seen: String,
        /// What to check.
        hint: String,
    },
    /// The probe speaks another protocol version.
    #[error("the probe on {path} speaks protocol version {probe}, this host speaks {host}")]
    #[diagnostic(
        code(slackmeter::link::version),
        help("update the probe firmware or slackmeter so both speak the same version")
    )]
    Version {
        /// Path.
        path: String,
        /// Probe's version.
        probe: u8,
        /// Ours.
        host: u8,
    },
    /// A command was refused or never acknowledged.
    #[error("the probe did not accept {command}: {reason}")]
    #[diagnostic(code(slackmeter::link::command))]
    Command {
        /// Which command.
        command: String,
        /// Result or timeout.
        reason: String,
    },
}

/// What the link reports.
#[derive(Debug, Clone, PartialEq)]
pub enum LinkEvent {
    /// Trying to open and handshake (attempt number from 1).
    Connecting {
        /// Attempt.
        attempt: u32,
    },
    /// Handshake done, streaming.
    Connected {
        /// The probe's self-description.
        probe: ProbeDesc,
        /// How many times the link has come back.
        reconnects: u32,
    },
    /// Bytes as read from the port (from the moment it opened).
    Data {
        /// Host receive time, ns since the Unix epoch.
        host_ns: u64,
        /// The bytes.
        bytes: Vec<u8>,
    },
    /// An ACK refused a configuration command (the session goes on).
    Refused {
        /// Which command.
        what: String,
        /// The result code's meaning.
        reason: String,
    },
    /// The device went away or fell silent.
    Lost {
        /// Why.
        reason: String,
    },
    /// Waiting before the next attempt.
    Retrying {
        /// When.
        retry_in: Duration,
        /// Why the last attempt failed.
        reason: String,
    },
    /// The link gave up.
    Failed(LinkError),
}

/// Host receive time now, ns since the Unix epoch.
pub fn host_ns_now() -> u64 {
    SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map_or(0, |d| d.as_nanos() as u64)
}

/// Serial ports the system lists, with their identification (not pseudo-terminals).
pub fn list_ports() -> Vec<(String, String)> {
    // the port listing can panic when the sysfs folder it scans is missing
    let found = std::panic::catch_unwind(serialport::available_ports);
    match found {
        Ok(Ok(ports)) => ports
            .into_iter()
            .map(|p| {
                let what = match p.port_type {
                    serialport::SerialPortType::UsbPort(u) => format!(
                        "USB {:04x}:{:04x} {} {}{}",
                        u.vid,
                        u.pid,
                        u.manufacturer.unwrap_or_default(),
                        u.product.unwrap_or_default(),
                        u.serial_number
                            .map(|s| format!(" (serial {s})"))
                            .unwrap_or_default()
                    ),
                    serialport::SerialPortType::PciPort => "PCI".into(),
                    serialport::SerialPortType::BluetoothPort => "Bluetooth".into(),
                    serialport::SerialPortType::Unknown => "unknown type".into(),
                };
                (p.port_name, what)
            })
            .collect(),
        _ => Vec::new(),
    }
}

fn ports_hint() -> String {
    let ports = list_ports();
    if ports.is_empty() {
        "no serial ports are listed on this system; is the probe plugged in? (`slackmeter ports` lists them; a virtual probe: `slackmeter sim --pty`)".into()
    } else {
        let list: Vec<String> = ports.iter().map(|(n, w)| format!("{n} ({w})")).collect();
        format!("ports here: {}", list.join(", "))
    }
}

type Port = Box<dyn serialport::SerialPort>;

/// Refuse a port path where there is no device (a mistyped path, not a probe being plugged in):
/// the error lists the ports there are.
pub fn check_present(path: &Path) -> Result<(), LinkError> {
    if path.exists() {
        Ok(())
    } else {
        Err(LinkError::NotFound {
            path: path.display().to_string(),
            hint: ports_hint(),
        })
    }
}

fn open_port(cfg: &LinkConfig) -> Result<Port, LinkError> {
    check_present(&cfg.path)?;
    let path = cfg.path.display().to_string();
    let port = serialport::new(path.clone(), cfg.baud)
        .timeout(Duration::from_millis(20))
        .open()
        .map_err(|e| match e.kind {
            serialport::ErrorKind::NoDevice => LinkError::NotFound {
                path: path.clone(),
                hint: ports_hint(),
            },
            serialport::ErrorKind::Io(io::ErrorKind::PermissionDenied) => {
                LinkError::Permission { path: path.clone() }
            }
            serialport::ErrorKind::Io(io::ErrorKind::NotFound) => LinkError::NotFound {
                path: path.clone(),
                hint: ports_hint(),
            },
            _ => LinkError::Open {
                path: path.clone(),
                reason: e.description,
            },
        })?;
    let mut port = port;
    // pseudo-terminals refuse modem-control calls ("not a typewriter"): that is fine
    let _ = port.write_data_terminal_ready(true);
    Ok(port)
}

struct Session {
    port: Port,
    decoder: StreamDecoder,
    seq: u16,
    tx: mpsc::Sender<LinkEvent>,
    first_bytes: Vec<u8>,
    bytes_seen: u64,
}

enum Step {
    Hello(ProbeDesc),
    Ack(proto::Ack),
    None,
}

impl Session {
    fn send(&mut self, m: &Message<'_>) -> io::Result<u16> {
        let mut wire = [0u8; MAX_WIRE];
        let seq = self.seq;
        let n = proto::encode_message(m, seq, &mut wire)
            .map_err(|e| io::Error::other(format!("{e:?}")))?;
        self.port.write_all(&wire[..n])?;
        self.port.flush()?;
        self.seq = self.seq.wrapping_add(1);
        Ok(seq)
    }

    /// Read once; forward the bytes; return what the handshake cares about.
    fn read_once(&mut self, buf: &mut [u8]) -> io::Result<Vec<Step>> {
        let n = match self.port.read(buf) {
            Ok(0) => return Err(io::Error::new(io::ErrorKind::BrokenPipe, "device closed")),
            Ok(n) => n,
            Err(e)
                if e.kind() == io::ErrorKind::TimedOut
                    || e.kind() == io::ErrorKind::Interrupted =>
            {
                return Ok(Vec::new());
            }
            Err(e) => return Err(e),
        };
        let bytes = &buf[..n];
        self.bytes_seen += n as u64;
        if self.first_bytes.len() < 32 {
            let take = (32 - self.first_bytes.len()).min(n);
            self.first_bytes.extend_from_slice(&bytes[..take]);
        }
        let mut steps = Vec::new();
        self.decoder.push(bytes, |f| match f.header.msg_type {
            types::HELLO | types::ACK => match Message::decode(&f) {
                Ok(Message::Hello(h)) => steps.push(Step::Hello(ProbeDesc::from_hello(&h))),
                Ok(Message::Ack(a)) => steps.push(Step::Ack(a)),
                _ => steps.push(Step::None),
            },
            _ => {}
        });
        let _ = self.tx.blocking_send(LinkEvent::Data {
            host_ns: host_ns_now(),
            bytes: bytes.to_vec(),
        });
        Ok(steps)
    }

    fn handshake(&mut self, cfg: &LinkConfig) -> Result<ProbeDesc, (LinkError, bool)> {
        let path = cfg.path.display().to_string();
        let io_lost = |e: io::Error| {
            (
                LinkError::Open {
                    path: path.clone(),
                    reason: e.to_string(),
                },
                true,
            )
        };
        let mut buf = vec![0u8; 64 * 1024];
        let start = Instant::now();
        let mut next_describe = Instant::now();
        let probe = loop {
            if Instant::now() >= next_describe {
                self.send(&Message::Describe).map_err(io_lost)?;
                next_describe = Instant::now() + Duration::from_millis(250);
            }
            let mut hello = None;
            for s in self.read_once(&mut buf).map_err(io_lost)? {
                if let Step::Hello(p) = s {
                    hello = Some(p);
                }
            }
            if let Some(p) = hello {
                break p;
            }
            if self.decoder.counters.bad_version > 0 {
                return Err((
                    LinkError::Version {
                        path,
                        probe: self.decoder.counters.last_bad_version,
                        host: proto::VERSION,
                    },
                    false,
                ));
            }
            if start.elapsed() >= cfg.hello_timeout {
                let c = self.decoder.counters;
                let (seen, hint) = if self.bytes_seen == 0 {
                    ("nothing was received".to_string(), "check that the probe is powered and flashed with slackmeter firmware, and that this is its port".to_string())
                } else if c.frames == 0 {
                    (
                        format!("{} bytes but no valid frame (first bytes: {})", self.bytes_seen, hex(&self.first_bytes)),
                        "only garbage: check the baud rate (--baud; the probe's documentation gives it), or this is not a slackmeter probe".to_string(),
                    )
                } else {
                    (
                        format!("{} valid frames but no self-description", c.frames),
                        "the device speaks the framing but never sent HELLO: update its firmware"
                            .to_string(),
                    )
                };
                return Err((
                    LinkError::NotAProbe {
                        path,
                        timeout_ms: cfg.hello_timeout.as_millis() as u64,
                        seen,
                        hint,
                    },
                    false,
                ));
            }
        };
        if probe.protocol_version != proto::VERSION {
            return Err((
                LinkError::Version {
                    path,
                    probe: probe.protocol_version,
                    host: proto::VERSION,
                },
                false,
            ));
        }
        for c in cfg.configure.clone() {
            let what = format!(
                "CONFIGURE channel {} param {} = {}",
                c.channel, c.param, c.value
            );
            match self.command(&Message::Configure(c), cfg, &mut buf) {
                Ok(_) => {}
                Err(Some(reason)) => {
                    let _ = self.tx.blocking_send(LinkEvent::Refused { what, reason });
                }
                Err(None) => {
                    return Err((
                        LinkError::Command {
                            command: what,
                            reason: "no acknowledgement".into(),
                        },
                        true,
                    ));
                }
            }
        }
        match self.command(&Message::Start, cfg, &mut buf) {
            Ok(_) => Ok(probe),
            Err(reason) => Err((
                LinkError::Command {
                    command: "START".into(),
                    reason: reason.unwrap_or_else(|| "no acknowledgement".into()),
                },
                true,
            )),
        }
    }

    /// Send a command and wait for its ACK (two retries). Err(Some) refused, Err(None) silent.
    fn command(
        &mut self,
        m: &Message<'_>,
        cfg: &LinkConfig,
        buf: &mut [u8],
    ) -> Result<u32, Option<String>> {
        for _ in 0..3 {
            let seq = self.send(m).map_err(|_| None)?;
            let until = Instant::now() + cfg.ack_timeout;
            while Instant::now() < until {
                for s in self.read_once(buf).map_err(|_| None)? {
                    if let Step::Ack(a) = s
                        && a.acked_seq == seq
                    {
                        return if a.result == results::OK {
                            Ok(a.value)
                        } else {
                            Err(Some(result_text(a.result).into()))
                        };
                    }
                }
            }
        }
        Err(None)
    }
}

/// The meaning of an ACK result code.
pub fn result_text(code: u8) -> &'static str {
    match code {
        results::OK => "ok",
        results::UNKNOWN_COMMAND => "unknown command",
        results::BAD_CHANNEL => "no such channel",
        results::BAD_PARAM => "parameter not supported",
        results::BAD_VALUE => "value not accepted",
        results::BAD_FRAME => "damaged frame",
        results::BUSY => "busy",
        results::BAD_VERSION => "unsupported version",
        _ => "unknown result code",
    }
}

fn hex(b: &[u8]) -> String {
    b.iter()
        .map(|x| format!("{x:02x}"))
        .collect::<Vec<_>>()
        .join(" ")
}

/// A running link: events arrive on `events`; dropping or [`Link::stop`] ends it.
pub struct Link {
    /// Events from the reader thread.
    pub events: mpsc::Receiver<LinkEvent>,
    stop: Arc<AtomicBool>,
    thread: Option<std::thread::JoinHandle<()>>,
}

impl Link {
    /// Start the reader thread. `capacity` bounds the event queue (back-pressure on the thread).
    pub fn start(cfg: LinkConfig, capacity: usize) -> Link {
        let (tx, rx) = mpsc::channel(capacity.max(4));
        let stop = Arc::new(AtomicBool::new(false));
        let s2 = stop.clone();
        let thread = std::thread::Builder::new()
            .name("probe-link".into())
            .spawn(move || run(cfg, tx, s2))
            .expect("spawn link thread");
        Link {
            events: rx,
            stop,
            thread: Some(thread),
        }
    }

    /// Ask the thread to stop and wait for it.
    pub fn stop(mut self) {
        self.shutdown();
    }

    fn shutdown(&mut self) {
        self.stop.store(true, Ordering::Relaxed);
        self.events.close();
        if let Some(t) = self.thread.take() {
            let _ = t.join();
        }
    }
}

impl Drop for Link {
    fn drop(&mut self) {
        self.shutdown();
    }
}

fn run(cfg: LinkConfig, tx: mpsc::Sender<LinkEvent>, stop: Arc<AtomicBool>) {
    let mut attempt = 0;
    let mut reconnects = 0;
    let mut was_connected = false;
    while !stop.load(Ordering::Relaxed) {
        attempt += 1;
        if tx.blocking_send(LinkEvent::Connecting { attempt }).is_err() {
            return;
        }
        let failure = match open_port(&cfg) {
            // a device that was never there is a mistyped path, not a probe being plugged in
            Err(e) => {
                let retryable = !matches!(e, LinkError::NotFound { .. });
                (e, retryable)
            }
            Ok(port) => {
                let mut s = Session {
                    port,
                    decoder: StreamDecoder::new(),
                    seq: 0,
                    tx: tx.clone(),
                    first_bytes: Vec::new(),
                    bytes_seen: 0,
                };
                match s.handshake(&cfg) {
                    Err(f) => f,
                    Ok(probe) => {
                        if was_connected {
                            reconnects += 1;
                        }
                        was_connected = true;
                        attempt = 0;
                        if tx
                            .blocking_send(LinkEvent::Connected { probe, reconnects })
                            .is_err()
                        {
                            return;
                        }
                        let reason = stream(&mut s, &cfg, &stop);
                        if stop.load(Ordering::Relaxed) {
                            let _ = s.send(&Message::Stop);
                            return;
                        }
                        if tx
                            .blocking_send(LinkEvent::Lost {
                                reason: reason.clone(),
                            })
                            .is_err()
                        {
                            return;
                        }
                        (
                            LinkError::Open {
                                path: cfg.path.display().to_string(),
                                reason,
                            },
                            true,
                        )
                    }
                }
            }
        };
        let (err, retryable) = failure;
        // never give up on a link that worked, or on a device that may appear; stop on real errors
        let keep_trying = cfg.reconnect
            && (retryable || was_connected)
            && !matches!(
                err,
                LinkError::Permission { .. } | LinkError::Version { .. }
            );
        if !keep_trying {
            let _ = tx.blocking_send(LinkEvent::Failed(err));
            return;
        }
        let _ = tx.blocking_send(LinkEvent::Retrying {
            retry_in: cfg.retry_every,
            reason: err.to_string(),
        });
        let until = Instant::now() + cfg.retry_every;
        while Instant::now() < until {
            if stop.load(Ordering::Relaxed) {
                return;
            }
            std::thread::sleep(Duration::from_millis(20));
        }
    }
}

/// Read until the device goes away, falls silent or we are stopped; returns why it ended.
fn stream(s: &mut Session, cfg: &LinkConfig, stop: &AtomicBool) -> String {
    let mut buf = vec![0u8; 64 * 1024];
    let mut last_byte = Instant::now();
    let mut seen = s.bytes_seen;
    while !stop.load(Ordering::Relaxed) {
        match s.read_once(&mut buf) {
            Ok(_) => {}
            Err(e) => return format!("device lost ({e})"),
        }
        if s.bytes_seen != seen {
            seen = s.bytes_seen;
            last_byte = Instant::now();
        } else if last_byte.elapsed() > cfg.silence {
            return format!("probe silent for {} s", cfg.silence.as_secs());
        }
        if s.tx.is_closed() {
            return "consumer gone".into();
        }
    }
    "stopped".into()
}

/// Whether a path names an existing device (or symlink to one).
pub fn device_present(path: &Path) -> bool {
    path.exists()
}

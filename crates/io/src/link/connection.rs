//! One open connection: frames out, bytes in (forwarded as received), the handshake and
//! acknowledged commands.

use std::io::{self, Read, Write};
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

use firmware_protocol::{self as proto, MAX_WIRE, Message, StreamDecoder, results, types};
use tokio::sync::mpsc;

use super::port::Port;
use slackmeter_core::probe::ProbeDesc;

use super::types::{LinkConfig, LinkError, LinkEvent, Setting, SettingChannel, host_ns_now};

pub(super) struct Connection {
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

impl Connection {
    /// A connection on an open port, forwarding what it reads to `tx`.
    pub(super) fn new(port: Port, tx: mpsc::Sender<LinkEvent>) -> Connection {
        Connection {
            port,
            decoder: StreamDecoder::new(),
            seq: 0,
            tx,
            first_bytes: Vec::new(),
            bytes_seen: 0,
        }
    }

    /// Read until the device goes away, falls silent or we are stopped; returns why it ended.
    pub(super) fn stream(&mut self, cfg: &LinkConfig, stop: &AtomicBool) -> String {
        let mut buf = vec![0u8; 64 * 1024];
        let mut last_byte = Instant::now();
        let mut seen = self.bytes_seen;
        while !stop.load(Ordering::Relaxed) {
            match self.read_once(&mut buf) {
                Ok(_) => {}
                Err(e) => return format!("device lost ({e})"),
            }
            if self.bytes_seen != seen {
                seen = self.bytes_seen;
                last_byte = Instant::now();
            } else if last_byte.elapsed() > cfg.silence {
                return format!("probe silent for {} s", cfg.silence.as_secs());
            }
            if self.tx.is_closed() {
                return "consumer gone".into();
            }
        }
        "stopped".into()
    }

    pub(super) fn send(&mut self, m: &Message<'_>) -> io::Result<u16> {
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

    pub(super) fn handshake(&mut self, cfg: &LinkConfig) -> Result<ProbeDesc, (LinkError, bool)> {
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
        for setting in cfg.configure.clone() {
            let (c, what) = match resolve(&setting, &probe) {
                Ok(resolved) => resolved,
                Err((what, reason)) => {
                    let _ = self.tx.blocking_send(LinkEvent::Refused { what, reason });
                    continue;
                }
            };
            match self.command(&Message::Configure(c), cfg, &mut buf) {
                Ok(_) => {}
                Err(Some(reason)) => {
                    let reason = refusal_words(&reason);
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

/// A setting against the probe's self-description: the CONFIGURE to send and the setting in
/// words ("edge-mode=count on channel 0 (CLK)"), or, for a label the probe does not have, the
/// words and why.
fn resolve(s: &Setting, probe: &ProbeDesc) -> Result<(proto::Configure, String), (String, String)> {
    let id = match &s.channel {
        SettingChannel::Id(id) => *id,
        SettingChannel::Label(label) => match probe.channel_by_label(label) {
            Some(c) => c.id,
            None => {
                let have: Vec<String> = probe
                    .channels
                    .iter()
                    .map(|c| format!("{} ({})", c.label, c.id))
                    .collect();
                return Err((
                    format!("the setting {} on channel {label}", s.words),
                    format!(
                        "this probe has no channel labelled {label}; its channels are {}",
                        have.join(", ")
                    ),
                ));
            }
        },
    };
    let on = if id == proto::params::PROBE {
        "the whole probe".to_string()
    } else {
        match probe.channel(id) {
            Some(c) => format!("channel {id} ({})", c.label),
            None => format!("channel {id}"),
        }
    };
    Ok((
        proto::Configure {
            channel: id,
            param: s.param,
            value: s.value,
        },
        format!("the setting {} on {on}", s.words),
    ))
}

/// Why the probe refused a setting, with what to do about it.
fn refusal_words(reason: &str) -> String {
    let fix = match reason {
        "no such channel" => "; `slackmeter listen PORT` lists the probe's channels",
        "parameter not supported" => "; this channel (or this firmware) has no such setting",
        "value not accepted" => "; the value is outside what the probe takes for it",
        _ => "",
    };
    format!("{reason}{fix}")
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

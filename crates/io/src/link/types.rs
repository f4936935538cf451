//! What the link is configured with and what it reports.

use std::path::PathBuf;
use std::time::{Duration, SystemTime, UNIX_EPOCH};

use firmware_protocol::Configure;
use slackmeter_core::probe::ProbeDesc;

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
    /// Settings sent after HELLO, before START (a channel by id or by its HELLO label).
    pub configure: Vec<Setting>,
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

/// The channel a setting is for: an id, or a label the probe's HELLO gives.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SettingChannel {
    /// A channel id, or [`firmware_protocol::params::PROBE`] for the whole probe.
    Id(u8),
    /// A channel label (exact, then ignoring case), resolved against each HELLO.
    Label(String),
}

/// One probe setting as the user gave it: sent as a CONFIGURE, and named in words when the
/// probe refuses it.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct Setting {
    /// Which channel.
    pub channel: SettingChannel,
    /// The parameter code (firmware_protocol::params).
    pub param: u8,
    /// The value sent.
    pub value: u32,
    /// The setting in the user's words, e.g. "edge-mode=count".
    pub words: String,
}

impl From<Configure> for Setting {
    fn from(c: Configure) -> Setting {
        Setting {
            channel: SettingChannel::Id(c.channel),
            param: c.param,
            value: c.value,
            words: format!("parameter {} = {}", c.param, c.value),
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
    /// The path names something that is not a serial device (a file, a folder, /dev/null).
    #[error("{path} is not a serial device: it is {what}")]
    #[diagnostic(
        code(slackmeter::link::not_serial),
        help(
            "give the probe's port, e.g. /dev/ttyUSB0 or /dev/ttyACM0 (`slackmeter ports` lists them), or the link a virtual probe made (`slackmeter sim --pty --link PATH`); to read a recording use `slackmeter report FILE`"
        )
    )]
    NotSerial {
        /// Path given.
        path: String,
        /// What it is instead.
        what: String,
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

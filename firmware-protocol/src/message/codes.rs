//! The protocol's numbers: message type codes, channel kinds, capability bits, line roles,
//! count methods, acknowledgement results, CONFIGURE parameters, flags and field limits.

/// Message type codes. Probe → host below 0x40, host → probe from 0x40.
pub mod types {
    /// Probe self-description.
    pub const HELLO: u8 = 0x01;
    /// Edge timestamps of an edge channel.
    pub const EDGES: u8 = 0x02;
    /// Count window (gated or reciprocal count, level samples).
    pub const COUNT: u8 = 0x03;
    /// Analog sample batch.
    pub const ANALOG: u8 = 0x04;
    /// Line change events (reset, fault, heartbeat…), same layout as EDGES.
    pub const LINES: u8 = 0x05;
    /// Probe status and loss counters.
    pub const STATUS: u8 = 0x06;
    /// Acknowledgement of a host command.
    pub const ACK: u8 = 0x07;
    /// Free text from the probe.
    pub const LOG: u8 = 0x08;
    /// One window's extremes of every cycle of a clock channel.
    pub const EXTREMES: u8 = 0x09;
    /// One window's count of cycles shorter than the host's thresholds.
    pub const VIOLATIONS: u8 = 0x0A;
    /// Host asks for HELLO.
    pub const DESCRIBE: u8 = 0x41;
    /// Host starts streaming.
    pub const START: u8 = 0x42;
    /// Host stops streaming.
    pub const STOP: u8 = 0x43;
    /// Host sets one parameter.
    pub const CONFIGURE: u8 = 0x44;
    /// Host checks the link.
    pub const PING: u8 = 0x45;
}

/// Channel kinds in HELLO.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
#[repr(u8)]
pub enum ChannelKind {
    /// A clock input: edges timestamped and/or counted.
    Edge = 1,
    /// A slow logic line (reset, fault, heartbeat): change events.
    Line = 2,
    /// An analog input (a supply rail): raw ADC samples with a scale to µV.
    Analog = 3,
}

impl ChannelKind {
    /// The kind of a HELLO kind byte.
    pub(super) fn from_byte(b: u8) -> Option<ChannelKind> {
        match b {
            1 => Some(ChannelKind::Edge),
            2 => Some(ChannelKind::Line),
            3 => Some(ChannelKind::Analog),
            _ => None,
        }
    }
}

/// Edge channel capability bits (HELLO `info` byte of an edge channel).
pub mod caps {
    /// Timestamps every edge (EDGES messages).
    pub const TIMESTAMPS: u8 = 1;
    /// Counts edges over gates (COUNT messages).
    pub const COUNT_WINDOWS: u8 = 2;
    /// Samples the level at pseudo-random times (COUNT `samples`/`samples_high`).
    pub const LEVEL_SAMPLING: u8 = 4;
    /// Times every cycle and reports per window (EXTREMES).
    pub const WINDOW_EXTREMES: u8 = 8;
    /// Counts the cycles shorter than the host's thresholds (VIOLATIONS).
    pub const THRESHOLD_COUNTS: u8 = 16;
}

/// Probe classes (HELLO byte 1): how the probe observes its clock inputs.
pub mod classes {
    /// Not stated (a probe written before classes existed): the capability bits tell.
    pub const UNSTATED: u8 = 0;
    /// Stamps edges (every edge, or in flagged bursts): EDGES.
    pub const STAMPING: u8 = 1;
    /// Counts edges over windows, with level samples: COUNT.
    pub const COUNTING: u8 = 2;
    /// Times every cycle and reports each window's extremes and threshold counts: EXTREMES,
    /// VIOLATIONS (and EDGES where the link allows).
    pub const EXTREMES: u8 = 3;
    /// The class's word (as reports show it), None for a value no class has.
    pub fn word(class: u8) -> Option<&'static str> {
        match class {
            UNSTATED => Some("unstated"),
            STAMPING => Some("stamping"),
            COUNTING => Some("counting"),
            EXTREMES => Some("extremes"),
            _ => None,
        }
    }
}

/// Line roles (HELLO `info` byte of a line channel; any other value is a line of no role).
pub mod roles {
    /// The machine's reset line.
    pub const RESET: u8 = 1;
    /// A fault line raised when a self-test check fails.
    pub const FAULT: u8 = 2;
    /// A heartbeat toggled by the machine's self-test loop.
    pub const HEARTBEAT: u8 = 3;
}

/// Count-window methods.
pub mod methods {
    /// Rising edges counted over a gate of `gate_ticks`.
    pub const GATED: u8 = 0;
    /// `edges` input cycles took exactly `gate_ticks` (first to last counted edge).
    pub const RECIPROCAL: u8 = 1;
}

/// Acknowledgement results.
pub mod results {
    /// Done.
    pub const OK: u8 = 0;
    /// Command type not known.
    pub const UNKNOWN_COMMAND: u8 = 1;
    /// No such channel.
    pub const BAD_CHANNEL: u8 = 2;
    /// No such parameter.
    pub const BAD_PARAM: u8 = 3;
    /// Value out of range.
    pub const BAD_VALUE: u8 = 4;
    /// The command frame was damaged (CRC, COBS, length); `acked_seq` is 0xFFFF.
    pub const BAD_FRAME: u8 = 5;
    /// Cannot do it now.
    pub const BUSY: u8 = 6;
    /// Frame version not supported.
    pub const BAD_VERSION: u8 = 7;
}

/// CONFIGURE parameters.
pub mod params {
    /// Channel on (1) or off (0).
    pub const ENABLE: u8 = 1;
    /// Edge channel mode: 0 timestamps, 1 count windows, 2 both, 3 window extremes.
    pub const EDGE_MODE: u8 = 2;
    /// Count-window gate length in ticks.
    pub const GATE_TICKS: u8 = 3;
    /// Analog sample interval in ticks.
    pub const SAMPLE_INTERVAL_TICKS: u8 = 4;
    /// Level samples per count window.
    pub const DUTY_SAMPLES: u8 = 5;
    /// Analog calibration: scale numerator in µV (stored by the probe).
    pub const CAL_SCALE_NUM_UV: u8 = 6;
    /// Analog calibration: offset in µV, two's complement (stored by the probe).
    pub const CAL_OFFSET_UV: u8 = 7;
    /// Status message interval in ms (probe-wide, channel 0xFF).
    pub const STATUS_INTERVAL_MS: u8 = 8;
    /// Shortest high time not counted as a violation, ticks (0: off).
    pub const HIGH_THRESHOLD_TICKS: u8 = 9;
    /// Shortest low time not counted as a violation, ticks (0: off).
    pub const LOW_THRESHOLD_TICKS: u8 = 10;
    /// Window length of EXTREMES and VIOLATIONS, ticks.
    pub const WINDOW_TICKS: u8 = 11;
    /// Channel id meaning "the whole probe".
    pub const PROBE: u8 = 0xFF;
}

/// Flag: data was lost just before this batch.
pub const FLAG_LOST_BEFORE: u8 = 1;
/// Flag (EDGES): the probe stamps in bursts and did not stamp the edges since the previous
/// batch by design (sampling, not loss): no interval spans the gap.
pub const FLAG_BURST_START: u8 = 2;

/// Longest firmware id.
pub(crate) const MAX_FIRMWARE: usize = 32;
/// Longest channel label.
pub(crate) const MAX_LABEL: usize = 16;
/// Most channels in a HELLO.
pub(crate) const MAX_CHANNELS: usize = 16;
/// Longest log text.
pub const MAX_LOG: usize = 200;
/// Largest encoded delta.
pub(crate) const MAX_DELTA_BYTES: usize = 9;
/// Most bins in an EXTREMES histogram.
pub(crate) const MAX_BINS: usize = 16;
/// Most short phases stamped in one VIOLATIONS message.
pub(crate) const MAX_VIOLATION_STAMPS: usize = 8;

//! The probe's self-description (HELLO) as one owned type, shared by the link, the engine, the
//! exports and the plots, so the tick and the channel kinds are read in one place only.

use firmware_protocol as proto;
use serde::Serialize;

/// What a channel carries.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ChannelKind {
    /// A clock input: edges timestamped and/or counted.
    Edge,
    /// A slow logic line (reset, fault, heartbeat): change events.
    Line,
    /// An analog input (a supply rail).
    Analog,
}

impl ChannelKind {
    /// The lower-case word used in reports and exports.
    pub fn word(self) -> &'static str {
        match self {
            ChannelKind::Edge => "edge",
            ChannelKind::Line => "line",
            ChannelKind::Analog => "analog",
        }
    }
}

impl std::fmt::Display for ChannelKind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.word())
    }
}

impl From<proto::ChannelKind> for ChannelKind {
    fn from(k: proto::ChannelKind) -> Self {
        match k {
            proto::ChannelKind::Edge => ChannelKind::Edge,
            proto::ChannelKind::Line => ChannelKind::Line,
            proto::ChannelKind::Analog => ChannelKind::Analog,
        }
    }
}

/// What a line channel means to the machine (PROTOCOL.md, line roles).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum LineRole {
    /// The machine's reset line.
    Reset,
    /// Raised when a self-test check fails.
    Fault,
    /// Toggled by the machine's self-test loop.
    Heartbeat,
    /// Any other line.
    Other,
}

impl LineRole {
    /// The role of a HELLO role byte.
    pub fn from_byte(info: u8) -> LineRole {
        match info {
            proto::roles::RESET => LineRole::Reset,
            proto::roles::FAULT => LineRole::Fault,
            proto::roles::HEARTBEAT => LineRole::Heartbeat,
            _ => LineRole::Other,
        }
    }

    /// The lower-case word used in reports.
    pub fn word(self) -> &'static str {
        match self {
            LineRole::Reset => "reset",
            LineRole::Fault => "fault",
            LineRole::Heartbeat => "heartbeat",
            LineRole::Other => "other",
        }
    }
}

impl std::fmt::Display for LineRole {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(self.word())
    }
}

/// An analog channel's calibration: µV = raw × `num_uv` / `den` + `offset_uv`.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
pub struct AnalogScale {
    /// Scale numerator, µV per count.
    pub num_uv: i32,
    /// Scale denominator (≥ 1).
    pub den: u32,
    /// Offset, µV.
    pub offset_uv: i32,
}

impl AnalogScale {
    /// One ADC step in mV.
    pub fn lsb_mv(&self) -> f64 {
        (f64::from(self.num_uv) / f64::from(self.den.max(1))).abs() / 1000.0
    }

    /// A raw ADC reading (or a mean of readings) in mV.
    pub fn mv(&self, raw: f64) -> f64 {
        (raw * f64::from(self.num_uv) / f64::from(self.den.max(1)) + f64::from(self.offset_uv))
            / 1000.0
    }
}

/// One channel of a probe.
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Channel {
    /// Id used in data messages.
    pub id: u8,
    /// What it carries.
    pub kind: ChannelKind,
    /// The raw HELLO info byte: capability bits (edge), role (line), ADC bits (analog).
    pub info: u8,
    /// Label, e.g. "CLK", "FAULT", "VCC_FAR".
    pub label: String,
    /// Calibration (analog channels; identity otherwise).
    pub scale: AnalogScale,
}

impl Channel {
    /// The line's role (line channels only).
    pub fn role(&self) -> Option<LineRole> {
        (self.kind == ChannelKind::Line).then(|| LineRole::from_byte(self.info))
    }
}

/// What a probe said about itself in its HELLO.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ProbeDesc {
    /// Firmware id.
    pub firmware: String,
    /// Protocol version it speaks.
    pub protocol_version: u8,
    /// How it observes its clock inputs, as its HELLO states: "stamping", "counting",
    /// "extremes", or "unstated" (a probe written before classes existed).
    pub probe_class: &'static str,
    /// Tick rate numerator, Hz.
    pub tick_num_hz: u64,
    /// Tick rate denominator.
    pub tick_den: u32,
    /// The tick in ns (from the two above).
    pub tick_ns: f64,
    /// Stated timebase accuracy, ppm (0 = unknown).
    pub timebase_ppm: u16,
    /// Highest edge rate timestamped without loss, kHz (0 = unknown).
    pub max_edge_rate_khz: u32,
    /// Channels, in HELLO order.
    pub channels: Vec<Channel>,
}

impl ProbeDesc {
    /// Read a decoded HELLO (the decoder has validated it: tick rate and denominator ≥ 1).
    pub fn from_hello(h: &proto::Hello<'_>) -> ProbeDesc {
        ProbeDesc {
            firmware: h.firmware.to_string(),
            protocol_version: h.protocol_version,
            probe_class: proto::classes::word(h.probe_class).unwrap_or("unstated"),
            tick_num_hz: h.tick_num_hz,
            tick_den: h.tick_den,
            tick_ns: tick_ns(h.tick_num_hz, h.tick_den),
            timebase_ppm: h.timebase_ppm,
            max_edge_rate_khz: h.max_edge_rate_khz,
            channels: h
                .channels
                .iter()
                .map(|c| Channel {
                    id: c.id,
                    kind: c.kind.into(),
                    info: c.info,
                    label: c.label.to_string(),
                    scale: AnalogScale {
                        num_uv: c.scale_num_uv,
                        den: c.scale_den,
                        offset_uv: c.offset_uv,
                    },
                })
                .collect(),
        }
    }

    /// The tick in whole picoseconds (at least 1): the VCD time base.
    pub fn tick_ps(&self) -> u64 {
        (self.tick_ns * 1000.0).round().max(1.0) as u64
    }

    /// A channel by id.
    pub fn channel(&self, id: u8) -> Option<&Channel> {
        self.channels.iter().find(|c| c.id == id)
    }

    /// A channel by label (exact, then ignoring case).
    pub fn channel_by_label(&self, label: &str) -> Option<&Channel> {
        self.channels.iter().find(|c| c.label == label).or_else(|| {
            self.channels
                .iter()
                .find(|c| c.label.eq_ignore_ascii_case(label))
        })
    }
}

/// The tick of a `num_hz / den` Hz tick rate, in ns (1 ns for a zero rate, which the decoder refuses).
pub fn tick_ns(num_hz: u64, den: u32) -> f64 {
    if num_hz == 0 {
        return 1.0;
    }
    1e9 * f64::from(den.max(1)) / num_hz as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn hello_reads_into_one_description() {
        let chans = [
            proto::Channel::edge(0, proto::caps::TIMESTAMPS, "CLK"),
            proto::Channel::line(4, proto::roles::HEARTBEAT, "HB"),
            proto::Channel {
                id: 8,
                kind: proto::ChannelKind::Analog,
                info: 10,
                label: "VCC",
                scale_num_uv: 6622,
                scale_den: 1,
                offset_uv: -1500,
            },
        ];
        let h = proto::Hello {
            protocol_version: 1,
            probe_class: 0,
            tick_num_hz: 16_000_000,
            tick_den: 1,
            timebase_ppm: 50,
            max_edge_rate_khz: 40,
            firmware: "fw",
            channels: proto::Channels::List(&chans),
        };
        let p = ProbeDesc::from_hello(&h);
        assert_eq!(p.tick_ns, 62.5);
        assert_eq!(p.tick_ps(), 62_500);
        assert_eq!(
            p.channel(4).and_then(Channel::role),
            Some(LineRole::Heartbeat)
        );
        assert_eq!(p.channel(0).and_then(Channel::role), None);
        assert_eq!(
            p.channel_by_label("vcc").map(|c| c.kind),
            Some(ChannelKind::Analog)
        );
        // 1000 counts × 6622 µV − 1500 µV = 6620.5 mV
        assert!((p.channels[2].scale.mv(1000.0) - 6620.5).abs() < 1e-9);
    }
}

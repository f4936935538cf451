//! Message bodies: encoding into a byte buffer and zero-copy decoding from a frame.
//!
//! Little-endian fixed fields; timestamps as a 64-bit first tick followed by unsigned LEB128
//! deltas (minimal encoding, at most 9 bytes each). Layouts are specified in PROTOCOL.md. By
//! concern: `codes` (type codes and other numbers), `hello`, `edges`, `samples` (count windows,
//! analog batches) and `control` (status, acknowledgements, logs, host commands), each family
//! with its own encoding and decoding; `validate` (checks both directions share), `wire` (field
//! reading and writing) and `error`.

mod codes;
mod control;
mod edges;
mod error;
mod extremes;
mod hello;
mod samples;
mod validate;
mod wire;

pub use codes::{
    ChannelKind, FLAG_BURST_START, FLAG_LOST_BEFORE, MAX_LOG, caps, classes, methods, params,
    results, roles, types,
};
pub use control::{Ack, Configure, Log, Status};
pub use edges::{EdgeBatch, EdgeWriter, Edges, Ticks};
pub use error::{BodyError, DecodeError};
pub use extremes::{ExtremesWindow, ShortPhase, Violations};
pub use hello::{Channel, ChannelIter, Channels, Hello};
pub use samples::{Analog, CountWindow};

use crate::frame::RawFrame;
use edges::read_edges;
use wire::{Reader, Writer};

/// Every message of the protocol.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Message<'a> {
    /// Probe self-description.
    Hello(Hello<'a>),
    /// Edge timestamps.
    Edges(Edges<'a>),
    /// Count window.
    Count(CountWindow),
    /// Analog samples.
    Analog(Analog<'a>),
    /// Line change events.
    Lines(Edges<'a>),
    /// Probe status.
    Status(Status),
    /// Acknowledgement.
    Ack(Ack),
    /// Probe log text.
    Log(Log<'a>),
    /// One window's extremes of every cycle.
    Extremes(ExtremesWindow<'a>),
    /// One window's cycles shorter than the host's thresholds.
    Violations(Violations<'a>),
    /// Host asks for HELLO.
    Describe,
    /// Host starts streaming.
    Start,
    /// Host stops streaming.
    Stop,
    /// Host sets a parameter.
    Configure(Configure),
    /// Host checks the link; echoed in the ACK's value.
    Ping(u32),
}

impl<'a> Message<'a> {
    /// Type code of this message.
    pub fn msg_type(&self) -> u8 {
        use types::*;
        match self {
            Message::Hello(_) => HELLO,
            Message::Edges(_) => EDGES,
            Message::Count(_) => COUNT,
            Message::Analog(_) => ANALOG,
            Message::Lines(_) => LINES,
            Message::Status(_) => STATUS,
            Message::Ack(_) => ACK,
            Message::Log(_) => LOG,
            Message::Extremes(_) => EXTREMES,
            Message::Violations(_) => VIOLATIONS,
            Message::Describe => DESCRIBE,
            Message::Start => START,
            Message::Stop => STOP,
            Message::Configure(_) => CONFIGURE,
            Message::Ping(_) => PING,
        }
    }

    /// Decode the body of an intact frame.
    pub fn decode(frame: &RawFrame<'a>) -> Result<Message<'a>, DecodeError> {
        use types::*;
        let body = frame.body;
        // no frame on the wire carries more (a body built by hand could): refused, so that
        // everything decoded also encodes
        if body.len() > crate::frame::MAX_BODY {
            return Err(DecodeError::BadField("body longer than a frame can carry"));
        }
        let mut r = Reader { buf: body };
        let m = match frame.header.msg_type {
            HELLO => Message::Hello(Hello::read(&mut r)?),
            EDGES => return Ok(Message::Edges(read_edges(body)?)),
            LINES => return Ok(Message::Lines(read_edges(body)?)),
            COUNT => Message::Count(CountWindow::read(&mut r)?),
            ANALOG => Message::Analog(Analog::read(&mut r)?),
            STATUS => Message::Status(Status::read(&mut r)?),
            ACK => Message::Ack(Ack::read(&mut r)?),
            LOG => Message::Log(Log::read(&mut r)?),
            EXTREMES => Message::Extremes(ExtremesWindow::read(&mut r)?),
            VIOLATIONS => Message::Violations(Violations::read(&mut r)?),
            DESCRIBE => Message::Describe,
            START => Message::Start,
            STOP => Message::Stop,
            CONFIGURE => Message::Configure(Configure::read(&mut r)?),
            PING => Message::Ping(r.u32()?),
            t => return Err(DecodeError::UnknownType(t)),
        };
        r.end()?;
        Ok(m)
    }

    /// Encode the body into `out`; returns its length.
    pub fn encode_body(&self, out: &mut [u8]) -> Result<usize, BodyError> {
        let mut w = Writer::new(out);
        match self {
            Message::Hello(h) => h.write(&mut w)?,
            Message::Edges(e) | Message::Lines(e) => e.write(&mut w)?,
            Message::Count(c) => c.write(&mut w)?,
            Message::Analog(a) => a.write(&mut w)?,
            Message::Status(s) => s.write(&mut w)?,
            Message::Ack(a) => a.write(&mut w)?,
            Message::Log(l) => l.write(&mut w)?,
            Message::Extremes(x) => x.write(&mut w)?,
            Message::Violations(v) => v.write(&mut w)?,
            Message::Describe | Message::Start | Message::Stop => {}
            Message::Configure(c) => c.write(&mut w)?,
            Message::Ping(n) => w.u32(*n)?,
        }
        Ok(w.len)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::frame::{Header, MAX_BODY, VERSION};

    fn round_trip(m: Message<'_>) {
        let mut body = [0u8; MAX_BODY];
        let n = m.encode_body(&mut body).unwrap();
        let f = RawFrame {
            header: Header {
                version: VERSION,
                msg_type: m.msg_type(),
                seq: 0,
            },
            body: &body[..n],
            lost_before: 0,
        };
        let back = Message::decode(&f).unwrap();
        let mut again = [0u8; MAX_BODY];
        let n2 = back.encode_body(&mut again).unwrap();
        assert_eq!(&body[..n], &again[..n2], "{m:?}");
    }

    #[test]
    fn every_message_round_trips() {
        let chans = [
            Channel::edge(0, 7, "CLK"),
            Channel {
                id: 8,
                kind: ChannelKind::Analog,
                info: 12,
                label: "VCC_FAR",
                scale_num_uv: 5_500_000,
                scale_den: 1024,
                offset_uv: -3,
            },
        ];
        round_trip(Message::Hello(Hello {
            protocol_version: 1,
            probe_class: classes::EXTREMES,
            tick_num_hz: 125_000_000,
            tick_den: 1,
            timebase_ppm: 50,
            max_edge_rate_khz: 20_000,
            firmware: "test",
            channels: Channels::List(&chans),
        }));
        round_trip(Message::Count(CountWindow {
            channel: 0,
            method: 1,
            start_tick: 9,
            gate_ticks: 10,
            edges: 3,
            samples: 8,
            samples_high: 4,
        }));
        round_trip(Message::Status(Status {
            uptime_ticks: 1 << 40,
            frames_sent: 3,
            ..Default::default()
        }));
        round_trip(Message::Ack(Ack {
            acked_seq: 4,
            command: types::PING,
            result: 0,
            value: 77,
        }));
        round_trip(Message::Log(Log {
            level: 1,
            text: "héllo",
        }));
        round_trip(Message::Configure(Configure {
            channel: 0xFF,
            param: 8,
            value: 1000,
        }));
        round_trip(Message::Ping(0xDEAD_BEEF));
        let bins: [u8; 8] = [3, 0, 0, 0, 1, 0, 0, 0];
        round_trip(Message::Extremes(ExtremesWindow {
            channel: 0,
            flags: 1,
            start_tick: 1 << 33,
            window_ticks: 1_250_000,
            cycles: 4,
            high_min_ticks: 30,
            high_max_ticks: 33,
            low_min_ticks: 29,
            low_max_ticks: 40,
            period_min_ticks: 60,
            period_max_ticks: 72,
            high_sum_ticks: 125,
            low_sum_ticks: 130,
            bin_origin_ticks: 56,
            bin_width_ticks: 8,
            bins: &bins,
        }));
        let mut stamps = [0u8; 26];
        let n = Violations::stamp_bytes(
            &[
                ShortPhase {
                    tick: 99,
                    length_ticks: 3,
                    high: true,
                },
                ShortPhase {
                    tick: 400,
                    length_ticks: 20,
                    high: false,
                },
            ],
            &mut stamps,
        );
        round_trip(Message::Violations(Violations {
            channel: 0,
            flags: 0,
            start_tick: 0,
            window_ticks: 1000,
            high_threshold_ticks: 25,
            low_threshold_ticks: 25,
            high_short: 1,
            low_short: 7,
            stamps: &stamps[..n],
        }));
        round_trip(Message::Describe);
        round_trip(Message::Start);
        round_trip(Message::Stop);
        round_trip(Message::Analog(Analog {
            channel: 8,
            flags: 0,
            first_tick: 5,
            interval_ticks: 100,
            raw: &[1, 2, 3, 4],
        }));
    }
}

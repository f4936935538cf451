//! Export a recording's signals: a value change dump (IEEE Std 1364 VCD: clock and lines as
//! wires, rails as reals, timescale from the probe tick) and CSV (one row per edge, line change
//! or rail sample), through the general-purpose `vcd` and `csv` crates. The signals are what the
//! measurement engine took in: its validated events, watched while the recording replays.

use std::io::Write;

use slackmeter_core::measure::{EngineConfig, Event, Feed, Observer};
use slackmeter_core::probe::ChannelKind;

use crate::record::{Recording, RecordingError, ReplayOptions};

/// One signal event.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Value {
    /// A logic level.
    Level(bool),
    /// A voltage in mV.
    Millivolts(f64),
}

/// A channel as the probe described it.
#[derive(Clone, Debug, PartialEq)]
pub struct Signal {
    /// Channel id.
    pub id: u8,
    /// Label.
    pub label: String,
    /// What it carries.
    pub kind: ChannelKind,
}

/// Everything a recording carries, as signal events in time order.
#[derive(Clone, Debug, Default)]
pub struct Signals {
    /// Probe tick, ns.
    pub tick_ns: f64,
    /// Tick in whole picoseconds (the VCD time unit base).
    pub tick_ps: u64,
    /// Channels.
    pub signals: Vec<Signal>,
    /// (tick, channel id, value), sorted by tick (the engine's timeline).
    pub events: Vec<(u64, u8, Value)>,
}

impl Observer for Signals {
    fn event(&mut self, ev: &Event<'_>) {
        match *ev {
            Event::Probe { desc, new: true } => {
                self.tick_ns = desc.tick_ns;
                self.tick_ps = desc.tick_ps();
                self.signals = desc
                    .channels
                    .iter()
                    .map(|c| Signal {
                        id: c.id,
                        label: c.label.clone(),
                        kind: c.kind,
                    })
                    .collect();
            }
            Event::Edges {
                channel,
                first_rising,
                ticks,
            }
            | Event::Lines {
                channel,
                first_rising,
                ticks,
            } => {
                let mut level = first_rising;
                for &t in ticks {
                    self.events.push((t, channel, Value::Level(level)));
                    level = !level;
                }
            }
            Event::Analog {
                channel, samples, ..
            } => self.events.extend(
                samples
                    .iter()
                    .map(|s| (s.tick, channel, Value::Millivolts(s.mv))),
            ),
            _ => {}
        }
    }
}

/// Read every event of a recording, replayed through the engine as `report` replays it (memory
/// grows with the events: meant for files a waveform viewer can open).
pub fn collect(rec: &mut Recording) -> Result<Signals, RecordingError> {
    let mut feed = Feed::with_observer(EngineConfig::default(), Signals::default());
    rec.replay(&mut feed, ReplayOptions::default(), |_| {})?;
    let mut out = feed.into_observer();
    out.events.sort_by_key(|e| e.0);
    Ok(out)
}

/// The coarsest VCD timescale (1 ns, 100 ps, 10 ps, 1 ps) that divides the tick.
pub fn timescale(tick_ps: u64) -> (u32, vcd::TimescaleUnit, u64) {
    for (ps, n, unit) in [
        (1000, 1, vcd::TimescaleUnit::NS),
        (100, 100, vcd::TimescaleUnit::PS),
        (10, 10, vcd::TimescaleUnit::PS),
    ] {
        if tick_ps.is_multiple_of(ps) {
            return (n, unit, ps);
        }
    }
    (1, vcd::TimescaleUnit::PS, 1)
}

/// Write a VCD.
pub fn write_vcd(s: &Signals, w: impl Write) -> std::io::Result<()> {
    let mut v = vcd::Writer::new(w);
    let (n, unit, unit_ps) = timescale(s.tick_ps);
    v.timescale(n, unit)?;
    v.add_module("probe")?;
    let mut ids = Vec::new();
    for sig in &s.signals {
        let name: String = sig
            .label
            .chars()
            .map(|c| {
                if c.is_ascii_alphanumeric() || c == '_' {
                    c
                } else {
                    '_'
                }
            })
            .collect();
        let id = if sig.kind == ChannelKind::Analog {
            v.add_var(vcd::VarType::Real, 64, &name, None)?
        } else {
            v.add_wire(1, &name)?
        };
        ids.push((sig.id, id));
    }
    v.upscope()?;
    v.enddefinitions()?;
    let mut last = None;
    for &(tick, ch, val) in &s.events {
        let Some(&(_, id)) = ids.iter().find(|(c, _)| *c == ch) else {
            continue;
        };
        let t = tick * s.tick_ps / unit_ps;
        if last != Some(t) {
            v.timestamp(t)?;
            last = Some(t);
        }
        match val {
            Value::Level(b) => {
                v.change_scalar(id, if b { vcd::Value::V1 } else { vcd::Value::V0 })?
            }
            Value::Millivolts(mv) => v.change_real(id, mv / 1000.0)?,
        }
    }
    v.flush()
}

/// Write a CSV: time_s, channel, label, kind, value (level 0/1, or volts).
pub fn write_csv(s: &Signals, w: impl Write) -> Result<(), csv::Error> {
    let mut c = csv::Writer::from_writer(w);
    c.write_record(["time_s", "channel", "label", "kind", "value"])?;
    for &(tick, ch, val) in &s.events {
        let sig = s.signals.iter().find(|x| x.id == ch);
        let label = sig.map_or("?", |x| x.label.as_str());
        let kind = sig.map_or("?", |x| x.kind.word());
        let value = match val {
            Value::Level(b) => (b as u8).to_string(),
            Value::Millivolts(mv) => format!("{:.4}", mv / 1000.0),
        };
        let time = format!("{:.12}", tick as f64 * s.tick_ns * 1e-9);
        c.write_record([time.as_str(), &ch.to_string(), label, kind, &value])?;
    }
    c.flush()?;
    Ok(())
}

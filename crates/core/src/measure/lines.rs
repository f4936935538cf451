//! Slow logic lines (reset, fault, heartbeat): edges, pulse widths, rates, events.

use serde::Serialize;

use crate::probe::LineRole;

use super::stats::IntStats;

/// One change of a line.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct LineEvent {
    /// Probe time, s.
    pub at_s: f64,
    /// New level.
    pub high: bool,
}

/// Mergeable line statistics of one block.
#[derive(Clone, Debug, PartialEq)]
pub struct LineAcc {
    /// Edges.
    pub edges: u64,
    /// Rising edges.
    pub rises: u64,
    /// High pulse widths (ticks).
    pub high_pulses: IntStats,
    /// First and last rising edge.
    pub rise_span: Option<(u64, u64)>,
}

impl LineAcc {
    fn new() -> LineAcc {
        LineAcc {
            edges: 0,
            rises: 0,
            high_pulses: IntStats::new(0),
            rise_span: None,
        }
    }
    /// Fold another block in.
    pub fn merge(&mut self, o: &LineAcc) {
        self.edges += o.edges;
        self.rises += o.rises;
        self.high_pulses.merge(&o.high_pulses);
        self.rise_span = match (self.rise_span, o.rise_span) {
            (Some(a), Some(b)) => Some((a.0.min(b.0), a.1.max(b.1))),
            (a, b) => a.or(b),
        };
    }
}

/// Running state of one line.
#[derive(Clone, Debug)]
pub struct LineState {
    tick_ns: f64,
    /// Current level, once known.
    pub level: Option<bool>,
    last_rise: Option<u64>,
    /// Tick of the last change.
    pub last_change: Option<u64>,
    /// Current block.
    pub acc: LineAcc,
    /// Recent events (oldest dropped beyond the cap).
    pub events: Vec<LineEvent>,
    max_events: usize,
}

impl LineState {
    /// A line with the probe tick.
    pub fn new(tick_ns: f64, max_events: usize) -> LineState {
        LineState {
            tick_ns,
            level: None,
            last_rise: None,
            last_change: None,
            acc: LineAcc::new(),
            events: Vec::new(),
            max_events,
        }
    }
    /// An empty block.
    pub fn empty_acc() -> LineAcc {
        LineAcc::new()
    }
    /// Continuity broke (time ran backwards, ticks ran out): forget the open pulse.
    pub fn break_continuity(&mut self) {
        self.last_rise = None;
    }
    /// One change to `high` at `tick` (after the last change).
    pub fn change(&mut self, tick: u64, high: bool) {
        self.level = Some(high);
        self.last_change = Some(tick);
        self.acc.edges += 1;
        if high {
            self.acc.rises += 1;
            self.last_rise = Some(tick);
            self.acc.rise_span = Some(self.acc.rise_span.map_or((tick, tick), |(s, _)| (s, tick)));
        } else if let Some(r) = self.last_rise.take() {
            self.acc
                .high_pulses
                .add(tick.saturating_sub(r) as i64, tick, 0);
        }
        if self.events.len() >= self.max_events {
            self.events.remove(0);
        }
        self.events.push(LineEvent {
            at_s: tick as f64 * self.tick_ns * 1e-9,
            high,
        });
    }
}

/// One line's figures.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct LineSnapshot {
    /// Channel id.
    pub channel: u8,
    /// Label.
    pub name: String,
    /// "reset", "fault", "heartbeat" or "other".
    pub role: LineRole,
    /// Current level.
    pub level: Option<bool>,
    /// Edges in the window.
    pub edges: u64,
    /// Rising edges in the window.
    pub rises: u64,
    /// Rising edges per second between the first and last in the window.
    pub rate_hz: Option<f64>,
    /// Mean high pulse width, ms.
    pub pulse_mean_ms: Option<f64>,
    /// Shortest high pulse, ms.
    pub pulse_min_ms: Option<f64>,
    /// Seconds since the last change (probe time).
    pub since_change_s: Option<f64>,
    /// Recent events.
    pub events: Vec<LineEvent>,
}

/// Figures of a line from a merged block.
pub fn snapshot(
    channel: u8,
    name: &str,
    role: LineRole,
    acc: &LineAcc,
    st: &LineState,
    now_tick: u64,
) -> LineSnapshot {
    let q = st.tick_ns;
    let rate_hz = acc.rise_span.and_then(|(a, b)| {
        (acc.rises > 1 && b > a).then(|| (acc.rises - 1) as f64 / ((b - a) as f64 * q * 1e-9))
    });
    LineSnapshot {
        channel,
        name: name.to_string(),
        role,
        level: st.level,
        edges: acc.edges,
        rises: acc.rises,
        rate_hz,
        pulse_mean_ms: acc.high_pulses.mean().map(|m| m * q * 1e-6),
        pulse_min_ms: (acc.high_pulses.n > 0).then_some(acc.high_pulses.min as f64 * q * 1e-6),
        since_change_s: st
            .last_change
            .map(|t| now_tick.saturating_sub(t) as f64 * q * 1e-9),
        events: st.events.iter().rev().take(50).rev().copied().collect(),
    }
}

//! What the engine reports: a [`Snapshot`] of every channel's figures for a [`Window`], with the
//! [`Trust`] counters and the failure onsets ([`FaultOnset`]).

use serde::Serialize;

use super::clock::{ClockSnapshot, Glitch, Stall};
use super::lines::LineSnapshot;
use super::rails::{RailSnapshot, Sag};
use super::series::Series;
use crate::probe::{LineRole, ProbeDesc};

/// The machine failed: the fault line rose. Figures at that moment.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct FaultOnset {
    /// What showed the failure: "fault line" or "heartbeat stopped".
    pub cause: String,
    /// Probe time of the fault edge (or of the last heartbeat), s.
    pub at_s: f64,
    /// Clock frequency at the fault: the last observed cycles' frequency, extrapolated along
    /// the trend of the last two observations to the fault's time.
    pub frequency_hz: f64,
    /// Its uncertainty (k = 2.5): the frequency change between the last observation and the
    /// fault, plus the observations' own spread.
    pub frequency_uncertainty_hz: f64,
    /// Duty of the last observed cycles.
    pub duty: f64,
    /// Shortest high time of the last observed cycles, ns (± one tick).
    pub high_min_ns: f64,
    /// Shortest low time of the last observed cycles, ns (± one tick).
    pub low_min_ns: f64,
    /// The lowest rail's latest value at the fault (name, mV).
    pub rail: Option<(String, f64)>,
}

/// Which stretch of time a snapshot covers.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Window {
    /// Everything since the start (or the last reset).
    Session,
    /// The recent window (`window_s`).
    Recent,
}

/// Counters that say how far the figures can be trusted.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
pub struct Trust {
    /// Frames accepted.
    pub frames: u64,
    /// Frames lost according to sequence numbers.
    pub lost_frames: u64,
    /// Frames with a CRC mismatch.
    pub crc_errors: u64,
    /// Other rejected byte runs (COBS, length, version).
    pub other_rejects: u64,
    /// Data messages flagged "lost before" by the probe.
    pub probe_lost_flags: u64,
    /// Probe-side overflow events (STATUS).
    pub probe_overflows: u64,
    /// Edges the probe dropped (STATUS).
    pub probe_edges_dropped: u64,
    /// Samples the probe dropped (STATUS).
    pub probe_samples_dropped: u64,
    /// Frames that passed the CRC but did not decode as a message.
    pub bad_messages: u64,
    /// Messages for channels the probe did not describe.
    pub unknown_channel: u64,
    /// Times the link came back.
    pub reconnects: u64,
}

impl Trust {
    /// Whether anything was lost or damaged.
    pub fn clean(&self) -> bool {
        self.lost_frames == 0
            && self.crc_errors == 0
            && self.other_rejects == 0
            && self.probe_lost_flags == 0
            && self.probe_edges_dropped == 0
            && self.probe_samples_dropped == 0
            && self.bad_messages == 0
    }
}

/// A figure set for one moment: every clock, rail and line, with the trust counters.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Snapshot {
    /// Which window.
    pub window: Window,
    /// Its length, s (session: probe time covered).
    pub window_s: f64,
    /// Probe time of the latest event, s.
    pub probe_time_s: f64,
    /// The probe.
    pub probe: Option<ProbeDesc>,
    /// Clocks.
    pub clocks: Vec<ClockSnapshot>,
    /// Rails.
    pub rails: Vec<RailSnapshot>,
    /// Lines.
    pub lines: Vec<LineSnapshot>,
    /// The rail with the lowest minimum (name, mV).
    pub worst_rail: Option<(String, f64)>,
    /// Recent glitches of the first clock.
    pub glitch_events: Vec<Glitch>,
    /// Recent stalls of the first clock.
    pub stall_events: Vec<Stall>,
    /// Recent sags (rail name, sag).
    pub sag_events: Vec<(String, Sag)>,
    /// Failures seen (fault line rising), oldest first.
    pub fault_onsets: Vec<FaultOnset>,
    /// The window's time-resolved figures, interval by interval.
    pub series: Series,
    /// Trust counters.
    pub trust: Trust,
}

impl Snapshot {
    /// How the first clock moved over the window, and its figures against the moving mean.
    pub fn movement(&self) -> Option<super::spread::Movement> {
        self.clock()
            .map(|c| super::spread::movement(c, &self.series))
    }

    /// The first clock channel's figures.
    pub fn clock(&self) -> Option<&ClockSnapshot> {
        self.clocks.first()
    }
    /// A rail by label.
    pub fn rail(&self, name: &str) -> Option<&RailSnapshot> {
        self.rails.iter().find(|r| r.name == name)
    }
    /// A line by role.
    pub fn line(&self, role: LineRole) -> Option<&LineSnapshot> {
        self.lines.iter().find(|l| l.role == role)
    }
    /// What the figures stand on: "lost" (data went missing), "sampled" (nothing lost, but a
    /// clock was not observed on every cycle: bursts, count windows, missing extremes windows)
    /// or "complete".
    pub fn completeness(&self) -> &'static str {
        if !self.trust.clean() {
            "lost"
        } else if self.clocks.iter().any(|c| !c.every_cycle_observed()) {
            "sampled"
        } else {
            "complete"
        }
    }
}

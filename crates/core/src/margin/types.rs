//! What a margin reports: [`Margin`], its settings ([`MarginConfig`]), the measured
//! [`Failure`] and why no margin can be given ([`MarginError`]).

use std::collections::BTreeMap;

use serde::Serialize;

use crate::measure::FaultOnset;

use super::judge::{Against, Verdict};
use super::problems::Problem;

/// Settings of the margin verdict.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct MarginConfig {
    /// Required margin over the budget, as a fraction of each phase's requirement
    /// (default 0.20 — common practice, no source).
    pub guard_band: f64,
    /// Temperature to derate at (the design's when None).
    pub temp_c: Option<f64>,
    /// Supply to use instead of the measured rails.
    pub vcc_v: Option<f64>,
}

impl Default for MarginConfig {
    fn default() -> Self {
        MarginConfig {
            guard_band: 0.20,
            temp_c: None,
            vcc_v: None,
        }
    }
}

/// The measured failure point and the margin to it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Failure {
    /// The onset as measured.
    pub onset: FaultOnset,
    /// Headroom of the operating clock to the onset: f_onset / f_operating − 1.
    pub headroom: Option<f64>,
}

/// The margin of a measured clock against a design's budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Margin {
    /// Supply the budget was derated at (the lowest measured rail unless given), V.
    pub vcc_used_v: f64,
    /// Where that supply came from.
    pub vcc_source: String,
    /// Per-section supply used, V.
    pub section_vcc_v: BTreeMap<String, f64>,
    /// Temperature used.
    pub temp_c: f64,
    /// The operating clock judged, Hz (the same as `operating_hz`).
    pub clock_hz: f64,
    /// The operating clock judged: the last clean interval before a failure, the interval
    /// with the least slack, or the steady clock, Hz.
    pub operating_hz: f64,
    /// Its uncertainty (k = 2.5), Hz.
    pub operating_uncertainty_hz: Option<f64>,
    /// Duty of the stretch judged.
    pub duty: f64,
    /// Which stretch was judged.
    pub judged: Judged,
    /// The clock's frequency moved by more than its uncertainty allows: whole-window
    /// frequency, jitter and TIE describe the spread, not one clock.
    pub moving: bool,
    /// Against the guaranteed (max corner) budget.
    pub worst_case: Against,
    /// Against the typical budget.
    pub typical: Against,
    /// Low-phase slack against the worst-case budget, ns.
    pub low_slack_ns: f64,
    /// High-phase slack against the worst-case budget, ns.
    pub high_slack_ns: f64,
    /// Period slack against the worst-case budget, ns.
    pub period_slack_ns: f64,
    /// The verdict.
    pub verdict: Verdict,
    /// What the slack alone says (never `failed`).
    pub slack_verdict: Verdict,
    /// The verdict in words: one paragraph with its numbers, the problems and the guard band.
    pub verdict_text: String,
    /// What else the measurement showed.
    pub problems: Vec<Problem>,
    /// Guard band asked for.
    pub guard_band: f64,
    /// Every worst-case phase clears the guard band beyond its bound.
    pub guard_band_met: bool,
    /// The highest frequency of any interval with no problem and every slack positive, Hz.
    pub highest_clean_hz: Option<f64>,
    /// Its uncertainty, Hz.
    pub highest_clean_uncertainty_hz: Option<f64>,
    /// When it ran, s of probe time.
    pub highest_clean_at_s: Option<f64>,
    /// Failure onset frequency when the recording holds a failure, Hz.
    pub fail_onset_hz: Option<f64>,
    /// Headroom from the operating point to the failure onset (fraction).
    pub headroom: Option<f64>,
    /// The failure, when present.
    pub failure: Option<Failure>,
    /// The mean low and high times stood in for the worst cycles (a counting probe).
    pub mean_phases: bool,
    /// Which measured figures were used, and caveats.
    pub notes: Vec<String>,
    /// Each interval's slack against the worst-case budget at its own rails.
    pub intervals: Vec<IntervalSlack>,
}

/// Why no margin can be given.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum MarginError {
    /// The snapshot has no clock.
    #[error("the measurement has no clock to judge")]
    NoClock,
    /// The clock has no period figures yet.
    #[error("the clock has no measured cycles yet")]
    NoCycles,
}

/// Why an interval is not clean.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Trouble {
    /// Glitches on the clock in it.
    Glitches,
    /// The clock stopped in it.
    Stall,
    /// The fault line rose in it.
    FaultLine,
    /// A rail was below its rated minimum in it.
    RailBelowMinimum,
    /// It lies after the first failure.
    AfterFailure,
}

/// One interval's slack against the worst-case budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct IntervalSlack {
    /// Start, s of probe time.
    pub from_s: f64,
    /// End, s.
    pub to_s: f64,
    /// Middle of its observed cycles, s.
    pub at_s: f64,
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Its uncertainty (k = 2.5), Hz.
    pub frequency_uncertainty_hz: f64,
    /// Duty.
    pub duty: f64,
    /// Lowest rail in it, V (the supply the budget was derated at).
    pub vcc_v: f64,
    /// Worst low time − required, ns.
    pub low_slack_ns: f64,
    /// Worst high time − required, ns.
    pub high_slack_ns: f64,
    /// Worst period (bound: worst high + worst low) − required, ns.
    pub period_slack_ns: f64,
    /// What the worst-case budget at this interval's rails requires of the low phase, ns.
    pub low_required_ns: f64,
    /// … of the high phase, ns.
    pub high_required_ns: f64,
    /// … of the period, ns (0: no period requirement of its own).
    pub period_required_ns: f64,
    /// The smallest slack in % of its requirement.
    pub worst_slack_pct: Option<f64>,
    /// The smallest slack's phase.
    pub worst_phase: &'static str,
    /// Bound on each slack (± one tick), ns.
    pub uncertainty_ns: f64,
    /// What keeps it from being clean (empty: clean).
    pub trouble: Vec<Trouble>,
}

impl IntervalSlack {
    /// No problem in it.
    pub fn clean(&self) -> bool {
        self.trouble.is_empty()
    }

    /// Every phase's slack is positive as measured.
    pub fn positive(&self) -> bool {
        self.low_slack_ns > 0.0 && self.high_slack_ns > 0.0 && self.period_slack_ns > 0.0
    }
}

/// Which stretch of the session a margin judges.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Basis {
    /// The whole window (a steady clock, or no time-resolved figures).
    Session,
    /// The last clean interval before the first failure (a moving clock that failed).
    LastCleanBeforeFailure,
    /// The interval with the least slack (a moving clock that did not fail).
    LeastSlack,
}

/// The stretch judged.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Judged {
    /// Why this stretch.
    pub basis: Basis,
    /// Its start, s of probe time.
    pub from_s: f64,
    /// Its end, s.
    pub to_s: f64,
}

/// The highest frequency that ran clean (no problem, every slack positive), with its
/// uncertainty: the interval's own, and the frequency that the deciding phase's ± bound
/// stands for (a phase time scales as 1/f, so δf/f = δt/t).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct HighestClean {
    /// Frequency, Hz.
    pub frequency_hz: f64,
    /// Its uncertainty, Hz.
    pub uncertainty_hz: f64,
    /// When, s of probe time.
    pub at_s: f64,
}

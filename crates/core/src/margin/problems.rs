//! What else the measurement showed, beside the slack: failures (glitches, stalls, the fault
//! line, a stopped heartbeat), rails below their rated minimum, the share of cycles observed,
//! figures the probe could not give, lost data.

use serde::Serialize;

use crate::measure::{ClockSnapshot, Snapshot};

use super::measured;

/// What kind of problem.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ProblemKind {
    /// Short pulses on the clock (a discrete-logic machine double-clocks on them).
    Glitches,
    /// The clock stopped.
    Stalls,
    /// The machine's fault line rose.
    FaultLine,
    /// The machine's heartbeat stopped.
    HeartbeatStopped,
    /// A rail was below its rated minimum (one problem per rail).
    RailBelowMinimum,
    /// The worst cycles are the worst of a share of the cycles only.
    SampledCoverage,
    /// The probe counted cycles whose phase was shorter than the thresholds the host set.
    ThresholdViolations,
    /// Figures this probe cannot give.
    Unavailable,
    /// Data was lost or damaged on the way.
    DataLost,
}

impl ProblemKind {
    /// Its JSON name.
    pub fn name(self) -> &'static str {
        match self {
            ProblemKind::Glitches => "glitches",
            ProblemKind::Stalls => "stalls",
            ProblemKind::FaultLine => "fault-line",
            ProblemKind::HeartbeatStopped => "heartbeat-stopped",
            ProblemKind::RailBelowMinimum => "rail-below-minimum",
            ProblemKind::SampledCoverage => "sampled-coverage",
            ProblemKind::ThresholdViolations => "threshold-violations",
            ProblemKind::Unavailable => "unavailable",
            ProblemKind::DataLost => "data-lost",
        }
    }

    /// Whether the machine showed a failure (the verdict is then `failed`).
    pub fn is_failure(self) -> bool {
        matches!(
            self,
            ProblemKind::Glitches
                | ProblemKind::Stalls
                | ProblemKind::FaultLine
                | ProblemKind::HeartbeatStopped
        )
    }
}

/// The heartbeat's last change and how long it has been silent since, s, when that silence
/// is longer than three of its half-periods. The engine gives a heartbeat onset only when the
/// fault line did not rise; the silence is a failure of its own all the same.
pub(super) fn heartbeat_silence(snap: &Snapshot) -> Option<(f64, f64)> {
    let hb = snap.line(crate::probe::LineRole::Heartbeat)?;
    let (rate, since) = (hb.rate_hz?, hb.since_change_s?);
    (rate > 0.0 && since > 3.0 / (2.0 * rate)).then_some((snap.probe_time_s - since, since))
}

/// One problem the measurement showed.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Problem {
    /// What kind.
    pub kind: ProblemKind,
    /// How many (glitches, stalls, fault rises, stretches below the minimum, cycles observed,
    /// figures unavailable, frames lost).
    pub count: u64,
    /// Probe time of the first, s (None when it has no time).
    pub first_s: Option<f64>,
    /// What it is, in words, with its numbers.
    pub detail: String,
    /// The rail, for a rail below its minimum.
    pub rail: Option<String>,
    /// Time spent below the minimum, s (a rail below its minimum).
    pub time_s: Option<f64>,
}

impl Problem {
    fn new(kind: ProblemKind, count: u64, first_s: Option<f64>, detail: String) -> Problem {
        Problem {
            kind,
            count,
            first_s,
            detail,
            rail: None,
            time_s: None,
        }
    }
}

fn at(t: Option<f64>) -> String {
    t.map_or(String::new(), |t| format!(", the first at {t:.3} s"))
}

/// The problems of a snapshot's window (`c` its clock; `mean_phases`: the mean phases stood
/// in for the worst cycles).
pub(super) fn problems(snap: &Snapshot, c: &ClockSnapshot, mean_phases: bool) -> Vec<Problem> {
    let mut out = Vec::new();
    let pts = &snap.series.points;
    if c.glitches > 0 {
        let first = pts
            .iter()
            .find_map(|p| p.first_glitch_s)
            .or(snap.glitch_events.first().map(|g| g.at_s));
        out.push(Problem::new(
            ProblemKind::Glitches,
            c.glitches,
            first,
            format!(
                "{} glitch{} on the clock{}: each can clock a register twice",
                c.glitches,
                if c.glitches == 1 { "" } else { "es" },
                at(first)
            ),
        ));
    }
    if c.stalls > 0 {
        let first = pts
            .iter()
            .find_map(|p| p.first_stall_s)
            .or(snap.stall_events.first().map(|s| s.at_s));
        out.push(Problem::new(
            ProblemKind::Stalls,
            c.stalls,
            first,
            match c.stalls {
                1 => format!("the clock stopped{}", at(first).replace(", the first", "")),
                n => format!("the clock stopped {n} times{}", at(first)),
            },
        ));
    }
    let rises: Vec<_> = snap
        .fault_onsets
        .iter()
        .filter(|o| o.cause == "fault line")
        .collect();
    if let Some(o) = rises.first() {
        out.push(Problem::new(
            ProblemKind::FaultLine,
            rises.len() as u64,
            Some(o.at_s),
            match rises.len() {
                1 => format!("the fault line rose at {:.3} s", o.at_s),
                n => format!(
                    "the fault line rose {n} times, the first at {:.3} s",
                    o.at_s
                ),
            },
        ));
    }
    if let Some(o) = snap
        .fault_onsets
        .iter()
        .find(|o| o.cause == "heartbeat stopped")
    {
        out.push(Problem::new(
            ProblemKind::HeartbeatStopped,
            1,
            Some(o.at_s),
            format!("the heartbeat stopped after {:.3} s", o.at_s),
        ));
    } else if let Some((last_s, since)) = heartbeat_silence(snap) {
        out.push(Problem::new(
            ProblemKind::HeartbeatStopped,
            1,
            Some(last_s),
            format!("the heartbeat stopped after {last_s:.3} s (silent for {since:.3} s)"),
        ));
    }
    for (i, r) in snap.rails.iter().enumerate() {
        if r.below_limit_s <= 0.0 {
            continue;
        }
        let idx = snap.series.rail_index(&r.name).unwrap_or(i);
        let below =
            |p: &crate::measure::SeriesPoint| p.rail_below_s.get(idx).is_some_and(|b| *b > 0.0);
        // stretches: runs of intervals below the minimum
        let stretches = pts
            .iter()
            .zip(std::iter::once(false).chain(pts.iter().map(below)))
            .filter(|(p, before)| below(p) && !before)
            .count()
            .max(1) as u64;
        let first = pts
            .iter()
            .find_map(|p| p.rail_first_below_s.get(idx).copied().flatten());
        let lowest = r.min_mv.map_or(String::new(), |m| {
            format!(
                ", lowest {:.3} V{}",
                m / 1000.0,
                r.min_at_s
                    .map_or(String::new(), |t| format!(" at {t:.3} s"))
            )
        });
        out.push(Problem {
            kind: ProblemKind::RailBelowMinimum,
            count: stretches,
            first_s: first,
            detail: format!(
                "{} was below its rated minimum {:.2} V for {:.3} s in {} stretch{}{}{}: no data sheet guarantees a part's timing there",
                r.name,
                r.limit_mv / 1000.0,
                r.below_limit_s,
                stretches,
                if stretches == 1 { "" } else { "es" },
                at(first),
                lowest
            ),
            rail: Some(r.name.clone()),
            time_s: Some(r.below_limit_s),
        });
    }
    let share = measured::coverage(c).or_else(|| measured::coverage_from_series(&snap.series, c));
    if let Some(share) = share.filter(|s| *s < 0.99) {
        let how = measured::observation(c).map_or(String::new(), |o| format!(" ({o})"));
        out.push(Problem::new(
            ProblemKind::SampledCoverage,
            c.cycles,
            None,
            format!(
                "the worst cycles are the worst of the {} cycles the probe timed, {:.1} % of the clock's{how}: a rarer shorter cycle may have gone unseen",
                c.cycles,
                share * 100.0
            ),
        ));
    }
    if let Some(v) = c.violations.as_ref().filter(|v| v.total() > 0) {
        let part = |n: u64, what: &str, t: Option<f64>| match t {
            Some(t) => format!(
                "{n} {what} time{} below {}",
                if n == 1 { "" } else { "s" },
                crate::units::ns(t)
            ),
            None => format!("{what} times not counted"),
        };
        let first = v.first.first();
        out.push(Problem::new(
            ProblemKind::ThresholdViolations,
            v.total(),
            first.map(|e| e.at_s),
            format!(
                "the probe counted {} cycle{} with a phase shorter than its threshold over {} windows ({}, {}){}",
                v.total(),
                if v.total() == 1 { "" } else { "s" },
                v.windows,
                part(v.high_short, "high", v.high_threshold_ns),
                part(v.low_short, "low", v.low_threshold_ns),
                first.map_or(String::new(), |e| format!(
                    ", the first a {} phase of {} at {:.6} s",
                    e.phase,
                    crate::units::ns(e.length_ns),
                    e.at_s
                ))
            ),
        ));
    }
    let mut missing: Vec<String> = c
        .unavailable
        .iter()
        .map(|u| format!("{} ({})", u.figure, u.reason))
        .collect();
    if mean_phases {
        missing.insert(
            0,
            "single cycles (the mean low and high times stand in for the worst ones, which is optimistic)".into(),
        );
    }
    if !missing.is_empty() {
        out.push(Problem::new(
            ProblemKind::Unavailable,
            missing.len() as u64,
            None,
            format!("this probe cannot give: {}", missing.join("; ")),
        ));
    }
    let t = &snap.trust;
    if !t.clean() {
        let n = t.lost_frames + t.crc_errors + t.other_rejects + t.bad_messages;
        out.push(Problem::new(
            ProblemKind::DataLost,
            n + t.probe_edges_dropped + t.probe_samples_dropped,
            None,
            format!(
                "data was lost on the way ({} frames lost, {} CRC errors, {} other rejects; the probe dropped {} edges and {} samples): a glitch or a short cycle may be among it",
                t.lost_frames,
                t.crc_errors,
                t.other_rejects + t.bad_messages,
                t.probe_edges_dropped,
                t.probe_samples_dropped
            ),
        ));
    }
    out
}

//! Margin: the measured worst cycles held against the timing budget, derated at the measured
//! supply. The only place where budget and measurement meet (pure).
//!
//! Per phase: slack = measured minimum − required (low time, high time, period), with the
//! measurement's ± one-tick bound; a slack's sign counts as known only beyond that bound
//! (`judge`). Beside the slack, the problems the measurement showed (`problems`): a failure
//! makes the verdict `failed` whatever the slack. A moving clock is judged interval by interval
//! (`intervals`): at the last clean interval before a failure, else at the interval with the
//! least slack; a steady one over the whole window. `supply` derates each board section at its
//! own rail; `words` says all of it in one paragraph; `measured` reads how the clock was
//! observed.

mod intervals;
mod judge;
mod measured;
mod problems;
mod supply;
mod types;
mod words;

use crate::budget::{ClockInput, Corner, Design, Library, solve};
use crate::measure::{ClockSnapshot, Snapshot};

pub use judge::{Against, PhaseSlack, Sign, Verdict};
pub use problems::{Problem, ProblemKind};
pub use types::{
    Basis, Failure, HighestClean, IntervalSlack, Judged, Margin, MarginConfig, MarginError, Trouble,
};

use judge::{Measured, against};
use supply::{Budgets, supply};

/// The whole window's worst phases (or the mean phases a counting probe stands in with).
fn session_phases(
    c: &ClockSnapshot,
    notes: &mut Vec<String>,
) -> Result<(Measured, bool), MarginError> {
    // a counting probe gives the frequency only: its mean period stands in
    let period_mean = c
        .period_mean_ns
        .or_else(|| c.frequency_hz.filter(|f| *f > 0.0).map(|f| 1e9 / f))
        .ok_or(MarginError::NoCycles)?;
    let duty = match c.duty {
        Some(d) => d,
        None => {
            notes.push("the duty was not measured: 50 % is assumed".into());
            0.5
        }
    };
    Ok(match (c.low_min_ns, c.high_min_ns, c.period_min_ns) {
        (Some(l), Some(h), Some(p)) => {
            if c.observation == "window-extremes" && c.every_cycle_observed() {
                notes.push(format!("every cycle observed: the probe timed all {} cycles and sent each window's extremes, so the worst cycle is the true worst cycle (± one tick)", c.cycles));
            } else {
                notes.push("measured worst cycles: the shortest low time, high time and period of the window (± one tick)".into());
            }
            (
                Measured {
                    low_ns: l,
                    high_ns: h,
                    period_ns: p,
                    bound_ns: c.resolution_ns,
                    duty,
                },
                false,
            )
        }
        _ => {
            notes.push(
                "the probe cannot observe single cycles: the MEAN low and high times (duty × period) stand in for the worst cycles, which is optimistic"
                    .into(),
            );
            // a mean is not bounded by the tick: the duty's own uncertainty (sampled duty: its
            // Wilson interval) bounds the mean phases
            let u = c
                .duty_uncertainty
                .map_or(c.resolution_ns, |du| du * period_mean);
            (
                Measured {
                    low_ns: period_mean * (1.0 - duty),
                    high_ns: period_mean * duty,
                    period_ns: period_mean,
                    bound_ns: u,
                    duty,
                },
                true,
            )
        }
    })
}

/// Judge a measured snapshot against a design.
pub fn evaluate(
    snap: &Snapshot,
    design: &Design,
    lib: &Library,
    cfg: &MarginConfig,
) -> Result<Margin, MarginError> {
    let c = snap.clock().ok_or(MarginError::NoClock)?;
    let mut notes = Vec::new();
    let (session, mean_phases) = session_phases(c, &mut notes)?;
    let mut budgets = Budgets::new(design, lib);
    // interval by interval, and which stretch is judged
    let failure_s = intervals::failure_s(snap);
    let iv = intervals::intervals(snap, design, cfg, &mut budgets, failure_s);
    let moving = measured::moving(c).unwrap_or_else(|| crate::measure::series_moves(&snap.series));
    let picked = if moving {
        intervals::judged_interval(&iv, failure_s)
    } else {
        None
    };
    let session_rails: Vec<(&str, Option<f64>)> = snap
        .rails
        .iter()
        .map(|r| (r.name.as_str(), r.min_mv))
        .collect();
    // the judged interval's series point and phases (None: the whole window is judged)
    let picked = picked.and_then(|(k, basis)| {
        let i = &iv[k];
        let p = snap.series.clock_points().find(|p| p.from_s == i.from_s)?;
        let m = intervals::measured(p, snap.series.resolution_ns)?;
        Some((i, p, m, basis))
    });
    let (m, rails, judged, operating_hz, operating_u) = match picked {
        Some((i, p, m, basis)) => {
            notes.push(format!(
                "judged at {:.3}–{:.3} s: its worst low and high time (± one tick), its worst period bounded by their sum, and its rail minima",
                i.from_s, i.to_s
            ));
            (
                m,
                intervals::rail_minima(snap, p),
                Judged {
                    basis,
                    from_s: i.from_s,
                    to_s: i.to_s,
                },
                i.frequency_hz,
                Some(i.frequency_uncertainty_hz),
            )
        }
        None => {
            let f = c
                .frequency_hz
                .filter(|f| *f > 0.0)
                .unwrap_or(1e9 / session.period_ns);
            (
                session,
                session_rails,
                Judged {
                    basis: Basis::Session,
                    // the series starts where the statistics do (after a reset too)
                    from_s: snap
                        .series
                        .points
                        .first()
                        .map_or(snap.probe_time_s - snap.window_s, |p| p.from_s),
                    to_s: snap.probe_time_s,
                },
                f,
                c.frequency_uncertainty_hz,
            )
        }
    };
    // the budgets at the judged stretch's supply
    let s = supply(design, cfg, &rails);
    notes.extend(s.notes);
    let clock = ClockInput {
        freq_hz: operating_hz,
        duty: m.duty,
    };
    let mut worst_op = s.op.clone();
    worst_op.corner = Corner::Max;
    let mut typ_op = s.op.clone();
    typ_op.corner = Corner::Typ;
    let bmax = solve(design, lib, &worst_op, Some(clock), Some(m.duty));
    let btyp = solve(design, lib, &typ_op, Some(clock), Some(m.duty));
    if !bmax.in_spec {
        notes.push("OUT OF SPEC: some part runs outside its data sheet's range at the measured supply (see the budget's warnings)".into());
    }
    let worst_case = against(&bmax, &m);
    let typical = against(&btyp, &m);
    let slack_verdict = Verdict::of_slack(&worst_case, &typical);
    let problems = problems::problems(snap, c, mean_phases);
    let verdict = if problems.iter().any(|p| p.kind.is_failure()) {
        Verdict::Failed
    } else {
        slack_verdict
    };
    let guard_band_met = worst_case.meets_guard_band(cfg.guard_band);
    let failure = snap.fault_onsets.first().map(|o| Failure {
        onset: o.clone(),
        headroom: Some(o.frequency_hz / operating_hz - 1.0),
    });
    let highest = intervals::highest_clean(&iv, &snap.series);
    let mut margin = Margin {
        vcc_used_v: s.op.vcc_v,
        vcc_source: s.source,
        section_vcc_v: s.op.section_vcc_v.clone(),
        temp_c: s.op.temp_c,
        clock_hz: operating_hz,
        operating_hz,
        operating_uncertainty_hz: operating_u,
        duty: m.duty,
        judged,
        moving,
        low_slack_ns: worst_case.phases[0].slack_ns,
        high_slack_ns: worst_case.phases[1].slack_ns,
        period_slack_ns: worst_case.phases[2].slack_ns,
        worst_case,
        typical,
        verdict,
        slack_verdict,
        verdict_text: String::new(),
        problems,
        guard_band: cfg.guard_band,
        guard_band_met,
        highest_clean_hz: highest.as_ref().map(|h| h.frequency_hz),
        highest_clean_uncertainty_hz: highest.as_ref().map(|h| h.uncertainty_hz),
        highest_clean_at_s: highest.as_ref().map(|h| h.at_s),
        fail_onset_hz: failure.as_ref().map(|f| f.onset.frequency_hz),
        headroom: failure.as_ref().and_then(|f| f.headroom),
        failure,
        mean_phases,
        notes,
        intervals: iv,
    };
    margin.verdict_text = words::paragraph(&margin, c);
    Ok(margin)
}

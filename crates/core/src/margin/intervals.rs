//! The margin interval by interval: each interval's worst phases against the worst-case budget
//! at that interval's rail minima; which interval a moving clock is judged at; the highest
//! frequency that ran clean.

use crate::budget::{Corner, Design};
use crate::measure::{Series, SeriesPoint, Snapshot};

use super::judge::Measured;
use super::supply::{Budgets, supply};
use super::types::{Basis, HighestClean, IntervalSlack, MarginConfig, Trouble};

/// The measured phases of a series point (None without clock figures).
pub(super) fn measured(p: &SeriesPoint, tick_ns: f64) -> Option<Measured> {
    Some(Measured {
        low_ns: p.low_min_ns?,
        high_ns: p.high_min_ns?,
        period_ns: p.period_min_ns?,
        bound_ns: tick_ns,
        duty: p.duty?,
    })
}

/// A point's rail minima by name; a rail the interval has no sample of takes the window's.
pub(super) fn rail_minima<'a>(snap: &'a Snapshot, p: &SeriesPoint) -> Vec<(&'a str, Option<f64>)> {
    snap.rails
        .iter()
        .map(|r| {
            let here = snap
                .series
                .rail_index(&r.name)
                .and_then(|i| p.rail_min_mv.get(i).copied().flatten());
            (r.name.as_str(), here.or(r.min_mv))
        })
        .collect()
}

/// The first failure's time: the fault line or the heartbeat, the first glitch or stall.
pub(super) fn failure_s(snap: &Snapshot) -> Option<f64> {
    let series = &snap.series.points;
    let mut first = snap.fault_onsets.first().map(|o| o.at_s);
    let mut take = |t: Option<f64>| {
        if let Some(t) = t {
            first = Some(first.map_or(t, |f: f64| f.min(t)));
        }
    };
    take(super::problems::heartbeat_silence(snap).map(|h| h.0));
    if snap.clock().is_some_and(|c| c.glitches > 0) {
        take(
            series
                .iter()
                .find_map(|p| p.first_glitch_s)
                .or(snap.glitch_events.first().map(|g| g.at_s)),
        );
    }
    if snap.clock().is_some_and(|c| c.stalls > 0) {
        take(
            series
                .iter()
                .find_map(|p| p.first_stall_s)
                .or(snap.stall_events.first().map(|s| s.at_s)),
        );
    }
    first
}

/// Every clock interval's slack against the worst-case budget at its own rails.
pub(super) fn intervals(
    snap: &Snapshot,
    design: &Design,
    cfg: &MarginConfig,
    budgets: &mut Budgets<'_>,
    failure_s: Option<f64>,
) -> Vec<IntervalSlack> {
    let series = &snap.series;
    let q = series.resolution_ns;
    series
        .clock_points()
        .filter_map(|p| {
            let m = measured(p, q)?;
            let s = supply(design, cfg, &rail_minima(snap, p));
            let b = budgets.at(&s.op, Corner::Max);
            let slack = [
                ("low", m.low_ns - b.low_required_ns, b.low_required_ns),
                ("high", m.high_ns - b.high_required_ns, b.high_required_ns),
                (
                    "period",
                    m.period_ns - b.period_required_ns,
                    b.period_required_ns,
                ),
            ];
            let worst = slack
                .iter()
                .filter(|x| x.2 > 0.0)
                .map(|x| (x.0, 100.0 * x.1 / x.2))
                .min_by(|a, b| a.1.total_cmp(&b.1));
            let mut trouble = Vec::new();
            if p.glitches > 0 {
                trouble.push(Trouble::Glitches);
            }
            if p.stalls > 0 {
                trouble.push(Trouble::Stall);
            }
            if p.fault_rises > 0 {
                trouble.push(Trouble::FaultLine);
            }
            if p.rail_below_s.iter().any(|b| *b > 0.0) {
                trouble.push(Trouble::RailBelowMinimum);
            }
            if let Some(f) = failure_s
                && p.observed_to_s.unwrap_or(p.to_s) > f
            {
                trouble.push(Trouble::AfterFailure);
            }
            Some(IntervalSlack {
                from_s: p.from_s,
                to_s: p.to_s,
                at_s: p.at_s(),
                frequency_hz: p.frequency_hz?,
                frequency_uncertainty_hz: p.frequency_uncertainty_hz.unwrap_or(0.0),
                duty: m.duty,
                vcc_v: s.op.vcc_v,
                low_slack_ns: slack[0].1,
                high_slack_ns: slack[1].1,
                period_slack_ns: slack[2].1,
                low_required_ns: slack[0].2,
                high_required_ns: slack[1].2,
                period_required_ns: slack[2].2,
                worst_slack_pct: worst.map(|w| w.1),
                worst_phase: worst.map_or("low", |w| w.0),
                uncertainty_ns: q,
                trouble,
            })
        })
        .collect()
}

/// The interval a moving clock is judged at (index into `iv`).
pub(super) fn judged_interval(
    iv: &[IntervalSlack],
    failure_s: Option<f64>,
) -> Option<(usize, Basis)> {
    match failure_s {
        Some(_) => iv
            .iter()
            .rposition(|i| i.clean())
            .map(|k| (k, Basis::LastCleanBeforeFailure)),
        None => iv
            .iter()
            .enumerate()
            .filter(|(_, i)| i.worst_slack_pct.is_some())
            .min_by(|a, b| {
                a.1.worst_slack_pct
                    .unwrap_or(0.0)
                    .total_cmp(&b.1.worst_slack_pct.unwrap_or(0.0))
            })
            .map(|(k, _)| (k, Basis::LeastSlack)),
    }
}

/// The highest clean interval's frequency and its uncertainty (see [`HighestClean`]).
pub(super) fn highest_clean(iv: &[IntervalSlack], series: &Series) -> Option<HighestClean> {
    let best = iv
        .iter()
        .filter(|i| i.clean() && i.positive())
        .max_by(|a, b| a.frequency_hz.total_cmp(&b.frequency_hz))?;
    let point = series.clock_points().find(|p| p.from_s == best.from_s)?;
    let phase_ns = match best.worst_phase {
        "high" => point.high_min_ns,
        "period" => point.period_min_ns,
        _ => point.low_min_ns,
    }?;
    let from_bound = best.frequency_hz * best.uncertainty_ns / phase_ns;
    Some(HighestClean {
        frequency_hz: best.frequency_hz,
        uncertainty_hz: from_bound.hypot(best.frequency_uncertainty_hz),
        at_s: best.at_s,
    })
}

//! Margin: the measured worst cycles held against the timing budget, derated at the measured
//! supply. The only place where budget and measurement meet (pure).
//!
//! Per phase: slack = measured minimum − required (low time, high time, period), with the
//! measurement's ± one-tick bound. Three references: the worst-case (max corner) budget, the
//! typical budget, and the measured failure point when a sweep is present.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::budget::{Budget, ClockInput, Corner, Design, Library, OperatingPoint, solve};
use crate::measure::{FaultOnset, Snapshot};

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

/// One phase against one budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PhaseSlack {
    /// "low", "high" or "period".
    pub phase: &'static str,
    /// What the budget requires, ns.
    pub required_ns: f64,
    /// The measured worst (shortest) one, ns.
    pub measured_ns: f64,
    /// measured − required, ns.
    pub slack_ns: f64,
    /// Slack as a percentage of the requirement.
    pub slack_pct: Option<f64>,
    /// Bound on the measurement (± one tick), ns.
    pub uncertainty_ns: f64,
}

/// All phases against one budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Against {
    /// The budget's corner.
    pub corner: Corner,
    /// Low, high, period.
    pub phases: Vec<PhaseSlack>,
    /// Every phase has slack ≥ 0.
    pub inside: bool,
    /// …even when the measurement's bound is taken against it.
    pub inside_beyond_doubt: bool,
    /// The smallest slack in % of its requirement.
    pub worst_slack_pct: Option<f64>,
    /// f_max of this budget at the measured duty, Hz.
    pub fmax_at_duty_hz: f64,
}

/// Where the builder stands.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Every phase fits the guaranteed budget.
    InsideWorstCase,
    /// Beyond the guaranteed budget, inside the typical one.
    BeyondWorstCaseInsideTypical,
    /// Beyond the typical budget too.
    BeyondTypical,
}

/// The measured failure point and the margin to it.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Failure {
    /// The onset as measured.
    pub onset: FaultOnset,
    /// Headroom of the operating clock to the onset: f_onset / f − 1.
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
    /// Measured operating clock, Hz.
    pub clock_hz: f64,
    /// Measured duty.
    pub duty: f64,
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
    /// The verdict in words, with numbers.
    pub verdict_text: String,
    /// Guard band asked for.
    pub guard_band: f64,
    /// Whether the worst-case margin is at least the guard band.
    pub guard_band_met: bool,
    /// Failure onset frequency when the recording holds a failure, Hz.
    pub fail_onset_hz: Option<f64>,
    /// Headroom to the failure onset (fraction).
    pub headroom: Option<f64>,
    /// The failure, when present.
    pub failure: Option<Failure>,
    /// The mean low and high times stood in for the worst cycles (a counting probe).
    pub mean_phases: bool,
    /// Which measured figures were used, and caveats.
    pub notes: Vec<String>,
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

fn against(
    budget: &Budget,
    low_ns: f64,
    high_ns: f64,
    period_ns: f64,
    u_ns: f64,
    duty: f64,
) -> Against {
    let mk = |phase, req: f64, meas: f64| {
        let slack = meas - req;
        PhaseSlack {
            phase,
            required_ns: req,
            measured_ns: meas,
            slack_ns: slack,
            slack_pct: (req > 0.0).then(|| 100.0 * slack / req),
            uncertainty_ns: u_ns,
        }
    };
    let phases = vec![
        mk("low", budget.low_required_ns, low_ns),
        mk("high", budget.high_required_ns, high_ns),
        mk("period", budget.period_required_ns, period_ns),
    ];
    let inside = phases.iter().all(|p| p.slack_ns >= 0.0);
    let inside_beyond_doubt = phases.iter().all(|p| p.slack_ns - p.uncertainty_ns >= 0.0);
    let worst_slack_pct = phases
        .iter()
        .filter_map(|p| p.slack_pct)
        .min_by(f64::total_cmp);
    let t = crate::budget::solver::min_period_ns(
        budget.low_required_ns,
        budget.high_required_ns,
        budget.period_required_ns,
        duty.clamp(0.01, 0.99),
    );
    Against {
        corner: budget.corner,
        phases,
        inside,
        inside_beyond_doubt,
        worst_slack_pct,
        fmax_at_duty_hz: 1e9 / t,
    }
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
    let q = c.resolution_ns;
    // worst cycles, or what stands in for them
    let mean_phases =
        c.low_min_ns.is_none() || c.high_min_ns.is_none() || c.period_min_ns.is_none();
    let (low, high, period, u) = match (c.low_min_ns, c.high_min_ns, c.period_min_ns) {
        (Some(l), Some(h), Some(p)) => {
            notes.push("measured worst cycles: the shortest low time, high time and period of the window (± one tick)".into());
            (l, h, p, q)
        }
        _ => {
            notes.push(
                "the probe cannot observe single cycles: the MEAN low and high times (duty × period) stand in for the worst cycles, which is optimistic"
                    .into(),
            );
            // a mean is not bounded by the tick: the duty's own uncertainty (sampled duty: its
            // Wilson interval) bounds the mean phases
            let u = c.duty_uncertainty.map_or(q, |du| du * period_mean);
            (
                period_mean * (1.0 - duty),
                period_mean * duty,
                period_mean,
                u,
            )
        }
    };
    // the supply: per section from the rails named in the design, else the lowest rail
    let mut op = OperatingPoint::of(design);
    if let Some(t) = cfg.temp_c {
        op.temp_c = t;
    }
    let mut vcc_source = format!("design operating point ({:.3} V)", op.vcc_v);
    if let Some(v) = cfg.vcc_v {
        op.vcc_v = v;
        vcc_source = format!("given ({v:.3} V)");
    } else if let Some((name, mv)) = &snap.worst_rail {
        op.vcc_v = mv / 1000.0;
        vcc_source = format!("lowest measured rail {name} (minimum over the window)");
        for s in &design.sections {
            match s.rail.as_ref().map(|label| (label, snap.rail(label))) {
                Some((_, Some(r))) => {
                    if let Some(m) = r.min_mv {
                        op.section_vcc_v.insert(s.name.clone(), m / 1000.0);
                    }
                }
                Some((label, None)) => notes.push(format!(
                    "the design's section {} names rail {label}, which the recording does not have (rails: {}): the lowest rail stands in",
                    s.name,
                    snap.rails.iter().map(|r| r.name.as_str()).collect::<Vec<_>>().join(", ")
                )),
                None => {}
            }
        }
        if !op.section_vcc_v.is_empty() {
            vcc_source = "each board section at its own measured rail's minimum".into();
        }
    } else {
        notes.push("no rail was measured: the design's supply is used".into());
    }
    let clock = ClockInput {
        freq_hz: 1e9 / period_mean,
        duty,
    };
    let mut worst_op = op.clone();
    worst_op.corner = Corner::Max;
    let mut typ_op = op.clone();
    typ_op.corner = Corner::Typ;
    let bmax = solve(design, lib, &worst_op, Some(clock), Some(duty));
    let btyp = solve(design, lib, &typ_op, Some(clock), Some(duty));
    if !bmax.in_spec {
        notes.push("OUT OF SPEC: some part runs outside its data sheet's range at the measured supply (see the budget's warnings)".into());
    }
    let worst_case = against(&bmax, low, high, period, u, duty);
    let typical = against(&btyp, low, high, period, u, duty);
    let verdict = if worst_case.inside {
        Verdict::InsideWorstCase
    } else if typical.inside {
        Verdict::BeyondWorstCaseInsideTypical
    } else {
        Verdict::BeyondTypical
    };
    let guard_band_met = worst_case
        .worst_slack_pct
        .is_some_and(|p| p >= cfg.guard_band * 100.0);
    let failure = snap.fault_onsets.first().map(|o| Failure {
        onset: o.clone(),
        headroom: Some(o.frequency_hz * period_mean * 1e-9 - 1.0),
    });
    let fmt_slack = |a: &Against| {
        a.phases
            .iter()
            .map(|p| {
                format!(
                    "{} {:+.1} ns ({})",
                    p.phase,
                    p.slack_ns,
                    p.slack_pct.map_or("—".into(), |x| format!("{x:+.0} %"))
                )
            })
            .collect::<Vec<_>>()
            .join(", ")
    };
    let vtext = match verdict {
        Verdict::InsideWorstCase => format!(
            "inside the worst-case budget at {:.3} V: {}; {}",
            op.vcc_v,
            fmt_slack(&worst_case),
            if guard_band_met {
                format!(
                    "margin meets the {:.0} % guard band",
                    cfg.guard_band * 100.0
                )
            } else {
                format!(
                    "but LESS than the {:.0} % guard band",
                    cfg.guard_band * 100.0
                )
            }
        ),
        Verdict::BeyondWorstCaseInsideTypical => format!(
            "beyond the worst-case budget, inside the typical one at {:.3} V: worst case {}; typical {}",
            op.vcc_v,
            fmt_slack(&worst_case),
            fmt_slack(&typical)
        ),
        Verdict::BeyondTypical => format!(
            "no margin left: beyond even the typical budget at {:.3} V: typical {}",
            op.vcc_v,
            fmt_slack(&typical)
        ),
    };
    let verdict_text = match &failure {
        Some(f) => format!(
            "{vtext}. Measured failure onset {:.3} MHz ± {:.3} MHz{}: running at {:.3} MHz that is {:+.0} % headroom",
            f.onset.frequency_hz / 1e6,
            f.onset.frequency_uncertainty_hz / 1e6,
            f.onset
                .rail
                .as_ref()
                .map_or(String::new(), |(n, mv)| format!(
                    " at {n} {:.3} V",
                    mv / 1000.0
                )),
            clock.freq_hz / 1e6,
            f.headroom.unwrap_or(0.0) * 100.0
        ),
        None => vtext,
    };
    Ok(Margin {
        vcc_used_v: op.vcc_v,
        vcc_source,
        section_vcc_v: op.section_vcc_v.clone(),
        temp_c: op.temp_c,
        clock_hz: clock.freq_hz,
        duty,
        low_slack_ns: worst_case.phases[0].slack_ns,
        high_slack_ns: worst_case.phases[1].slack_ns,
        period_slack_ns: worst_case.phases[2].slack_ns,
        worst_case,
        typical,
        verdict,
        verdict_text,
        guard_band: cfg.guard_band,
        guard_band_met,
        fail_onset_hz: failure.as_ref().map(|f| f.onset.frequency_hz),
        headroom: failure.as_ref().and_then(|f| f.headroom),
        failure,
        mean_phases,
        notes,
    })
}

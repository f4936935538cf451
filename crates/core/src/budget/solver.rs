//! Static timing analysis of a resolved design at one operating point, and the clock plan.
//!
//! Latest arrival (the chosen late corner) and earliest arrival (min corner) are propagated from
//! each clock edge separately, so every capture knows which phase its paths must fit:
//! launched ↑ captured ↓ → high phase; ↓ then ↑ → low phase; same edge → a full period.
//! Then L, H, P give d* = H/(L+H), T_min(d) = max(L/(1−d), H/d, P) and f_max.

use crate::budget::design::model::Design;
use crate::budget::library::model::Library;

mod clock;
mod evaluate;
mod notes;
mod paths;
mod propagate;
mod types;

use clock::Plan;
use evaluate::{Evaluator, PartLimit, Values};
use propagate::Groups;

pub use clock::min_period_ns;
pub use types::{
    Budget, ClockInput, ClockSlack, CriticalPaths, DutyPoint, Endpoint, Estimate, HoldCheck,
    HoldStatus, LimitKind, ModelNote, OperatingPoint, Path, Phase, PhaseLimit, PhaseLimits, Step,
    SweepPoint,
};

/// A phase's requirement: the slowest path against the clocked parts' limit.
fn limit(path_ns: f64, part: &PartLimit) -> PhaseLimit {
    let binds = if part.ns > path_ns {
        part.kind
    } else if path_ns > 0.0 {
        LimitKind::Path
    } else {
        LimitKind::None
    };
    PhaseLimit {
        binds,
        path_ns,
        part_ns: part.ns,
        part: part.by.clone(),
    }
}

/// Solve the design at an operating point; `clock` and `duty` add slack and f_max at that duty.
pub fn solve(
    design: &Design,
    lib: &Library,
    op: &OperatingPoint,
    clock: Option<ClockInput>,
    duty: Option<f64>,
) -> Budget {
    let mut ev = Evaluator::new(design, lib, op);
    let vals = Values::of(design, &mut ev);
    let parts = ev.clock_limits();
    let groups = Groups::of(design, design.operating.common_clock_credit);
    let arr = propagate::arrivals(design, &vals, &groups, false);
    let limits = PhaseLimits {
        low: limit(arr.required_ns(Phase::Low), &parts[0]),
        high: limit(arr.required_ns(Phase::High), &parts[1]),
        period: limit(arr.required_ns(Phase::Period), &parts[2]),
    };
    let plan = Plan::of_limits(&limits, clock, duty);
    let est_arr = propagate::arrivals(design, &vals, &groups, true);
    let est_plan = Plan::new(
        est_arr.required_ns(Phase::Low).max(parts[0].est_ns),
        est_arr.required_ns(Phase::High).max(parts[1].est_ns),
        est_arr.required_ns(Phase::Period).max(parts[2].est_ns),
        None,
        None,
    );
    let critical_paths = paths::critical_paths(design, lib, &mut ev, &vals, &arr);
    let mut endpoints = arr.endpoints;
    plan.endpoint_slack(&mut endpoints);
    let holds = plan.hold_checks(arr.holds);
    let mut found = notes::warnings(design, lib, &ev, op);
    for (ty, pin) in &ev.no_pulse_width {
        found.warnings.push(format!(
            "{ty}: the library gives no minimum {pin} pulse width, so nothing bounds the clock's phases by it (see its data sheet's tW)"
        ));
    }
    let fmax_best_duty_hz = 1e9 / plan.min_period_best_ns;
    if let Some(c) = &clock
        && let Some(w) = notes::plausibility(c, fmax_best_duty_hz)
    {
        found.warnings.push(w);
    }
    Budget {
        design: design.name.clone(),
        vcc_v: op.vcc_v,
        section_vcc_v: op.section_vcc_v.clone(),
        temp_c: op.temp_c,
        corner: op.corner,
        low_required_ns: plan.low_ns,
        high_required_ns: plan.high_ns,
        period_required_ns: plan.period_ns,
        limits,
        best_duty: plan.best_duty,
        min_period_best_duty_ns: plan.min_period_best_ns,
        fmax_best_duty_hz,
        min_period_50_ns: plan.min_period_50_ns,
        fmax_50_hz: 1e9 / plan.min_period_50_ns,
        at_duty: plan.at_duty,
        clock: plan.clock,
        critical_paths,
        endpoints,
        holds,
        estimate: Estimate {
            low_required_ns: est_plan.low_ns,
            high_required_ns: est_plan.high_ns,
            period_required_ns: est_plan.period_ns,
            best_duty: est_plan.best_duty,
            fmax_best_duty_hz: 1e9 / est_plan.min_period_best_ns,
            fmax_50_hz: 1e9 / est_plan.min_period_50_ns,
            error_low_pct: ev.err_range.map(|r| r.0),
            error_high_pct: ev.err_range.map(|r| r.1),
        },
        in_spec: found.in_spec,
        guaranteed: found.guaranteed,
        out_of_spec_parts: found.out_of_spec_parts,
        not_guaranteed_parts: found.not_guaranteed_parts,
        warnings: found.warnings,
        models: notes::models(design, lib),
    }
}

/// f_max against supply voltage over `points` evenly spaced values from `from_v` to `to_v`.
/// Sections given their own supply in `op` keep it; every other part follows the sweep.
pub fn sweep_vcc(
    design: &Design,
    lib: &Library,
    op: &OperatingPoint,
    from_v: f64,
    to_v: f64,
    points: usize,
) -> Vec<SweepPoint> {
    sweep_vcc_with_clock(design, lib, op, from_v, to_v, points, None)
}

/// [`sweep_vcc`], also saying at each supply whether `clock` fits.
pub fn sweep_vcc_with_clock(
    design: &Design,
    lib: &Library,
    op: &OperatingPoint,
    from_v: f64,
    to_v: f64,
    points: usize,
    clock: Option<ClockInput>,
) -> Vec<SweepPoint> {
    let points = points.max(2);
    (0..points)
        .map(|i| {
            let v = from_v + (to_v - from_v) * i as f64 / (points - 1) as f64;
            let op = OperatingPoint {
                vcc_v: v,
                ..op.clone()
            };
            let b = solve(design, lib, &op, clock, None);
            SweepPoint {
                vcc_v: v,
                low_required_ns: b.low_required_ns,
                high_required_ns: b.high_required_ns,
                period_required_ns: b.period_required_ns,
                fmax_50_hz: b.fmax_50_hz,
                best_duty: b.best_duty,
                fmax_best_duty_hz: b.fmax_best_duty_hz,
                in_spec: b.in_spec,
                guaranteed: b.guaranteed,
                estimate_fmax_50_hz: b.estimate.fmax_50_hz,
                estimate_fmax_best_duty_hz: b.estimate.fmax_best_duty_hz,
                binds: [
                    b.limits.low.binds,
                    b.limits.high.binds,
                    b.limits.period.binds,
                ],
                out_of_spec_parts: b.out_of_spec_parts,
                not_guaranteed_parts: b.not_guaranteed_parts,
                clock_meets: b.clock.as_ref().map(|c| c.meets),
                warnings: b.warnings,
            }
        })
        .collect()
}

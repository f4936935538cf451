//! Static timing analysis of a resolved design at one operating point, and the clock plan.
//!
//! Latest arrival (the chosen late corner) and earliest arrival (min corner) are propagated from
//! each clock edge separately, so every capture knows which phase its paths must fit:
//! launched ↑ captured ↓ → high phase; ↓ then ↑ → low phase; same edge → a full period.
//! Then L, H, P give d* = H/(L+H), T_min(d) = max(L/(1−d), H/d, P) and f_max.

use std::collections::BTreeMap;

use crate::budget::design::model::Design;
use crate::budget::library::model::Library;

mod clock;
mod evaluate;
mod notes;
mod paths;
mod propagate;
mod types;

use clock::Plan;
use evaluate::{Evaluator, Values};

pub use clock::min_period_ns;
pub use types::{
    Budget, ClockInput, ClockSlack, CriticalPaths, DutyPoint, Endpoint, HoldCheck, HoldStatus,
    ModelNote, OperatingPoint, Path, Phase, Step, SweepPoint,
};

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
    let arr = propagate::arrivals(design, &vals);
    let plan = Plan::new(
        arr.required_ns(Phase::Low),
        arr.required_ns(Phase::High),
        arr.required_ns(Phase::Period),
        clock,
        duty,
    );
    let critical_paths = paths::critical_paths(design, lib, &mut ev, &vals, &arr);
    let mut endpoints = arr.endpoints;
    plan.endpoint_slack(&mut endpoints);
    let holds = plan.hold_checks(arr.holds);
    let (in_spec, warnings) = notes::warnings(design, lib, &ev, op);
    Budget {
        design: design.name.clone(),
        vcc_v: op.vcc_v,
        section_vcc_v: op.section_vcc_v.clone(),
        temp_c: op.temp_c,
        corner: op.corner,
        low_required_ns: plan.low_ns,
        high_required_ns: plan.high_ns,
        period_required_ns: plan.period_ns,
        best_duty: plan.best_duty,
        min_period_best_duty_ns: plan.min_period_best_ns,
        fmax_best_duty_hz: 1e9 / plan.min_period_best_ns,
        min_period_50_ns: plan.min_period_50_ns,
        fmax_50_hz: 1e9 / plan.min_period_50_ns,
        at_duty: plan.at_duty,
        clock: plan.clock,
        critical_paths,
        endpoints,
        holds,
        in_spec,
        warnings,
        models: notes::models(design, lib),
    }
}

/// f_max against supply voltage over `points` evenly spaced values from `from_v` to `to_v`.
pub fn sweep_vcc(
    design: &Design,
    lib: &Library,
    op: &OperatingPoint,
    from_v: f64,
    to_v: f64,
    points: usize,
) -> Vec<SweepPoint> {
    let points = points.max(2);
    (0..points)
        .map(|i| {
            let v = from_v + (to_v - from_v) * i as f64 / (points - 1) as f64;
            let op = OperatingPoint {
                vcc_v: v,
                section_vcc_v: BTreeMap::new(),
                ..op.clone()
            };
            let b = solve(design, lib, &op, None, None);
            SweepPoint {
                vcc_v: v,
                low_required_ns: b.low_required_ns,
                high_required_ns: b.high_required_ns,
                period_required_ns: b.period_required_ns,
                fmax_50_hz: b.fmax_50_hz,
                best_duty: b.best_duty,
                fmax_best_duty_hz: b.fmax_best_duty_hz,
                in_spec: b.in_spec,
            }
        })
        .collect()
}

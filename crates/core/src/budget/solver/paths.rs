//! The critical path of each phase, walked back from its slowest capture to the launching
//! clock edge, with every step's delay and arrival time.

use super::evaluate::{CaptureValues, Eval, Evaluator, Values};
use super::propagate::{Arrivals, Pred, Worst};
use super::types::{CriticalPaths, Path, Phase, Step};
use crate::budget::design::model::{Capture, Design, Edge};
use crate::budget::library::model::Library;

/// A step before its arrival time is known.
struct RawStep {
    through: String,
    signal: String,
    delay_ns: f64,
    est_ns: f64,
    err: Option<f64>,
}

impl RawStep {
    fn of(through: String, signal: String, v: &Eval) -> RawStep {
        RawStep {
            through,
            signal,
            delay_ns: v.late,
            est_ns: v.late_est,
            err: v.err_pct,
        }
    }
}

/// The slowest path of each phase (absent when nothing constrains it).
pub(super) fn critical_paths(
    design: &Design,
    lib: &Library,
    ev: &mut Evaluator,
    vals: &Values,
    arr: &Arrivals,
) -> CriticalPaths {
    let mut path = |p: Phase| {
        let w = arr.worst[p as usize]?;
        Some(path_of(design, lib, ev, vals, arr, w))
    };
    CriticalPaths {
        low: path(Phase::Low),
        high: path(Phase::High),
        period: path(Phase::Period),
    }
}

fn path_of(
    design: &Design,
    lib: &Library,
    ev: &mut Evaluator,
    vals: &Values,
    arr: &Arrivals,
    w: Worst,
) -> Path {
    let cap = &design.captures[w.capture];
    let (mut rev, launch) = walk_back(design, lib, ev, vals, arr, &w);
    rev.push(RawStep {
        through: format!("{}{}", design.clock_name, w.edge.arrow()),
        signal: String::new(),
        delay_ns: 0.0,
        est_ns: 0.0,
        err: None,
    });
    let mut at = 0.0;
    let mut steps: Vec<Step> = rev
        .into_iter()
        .rev()
        .map(|r| {
            at += r.delay_ns;
            Step {
                through: r.through,
                signal: r.signal,
                delay_ns: r.delay_ns,
                at_ns: at,
                estimate_ns: differs(r.est_ns, r.delay_ns),
                model_err_pct: r.err,
            }
        })
        .collect();
    capture_steps(design, lib, &vals.captures[w.capture], cap, &mut steps, at);
    // the common clock path credit, when asked for: what the requirement is below the steps
    let end = steps.last().map_or(0.0, |s| s.at_ns);
    let credit = end - w.required_ns;
    if credit > 1e-9 {
        steps.push(Step {
            through: "common clock path credit (buffers shared by launch and capture)".into(),
            signal: String::new(),
            delay_ns: -credit,
            at_ns: w.required_ns,
            estimate_ns: None,
            model_err_pct: None,
        });
    }
    Path {
        capture: cap.name.clone(),
        launch,
        required_ns: w.required_ns,
        steps,
    }
}

/// The steps from the capture back to the launch (last step first) and the launch's name.
fn walk_back(
    design: &Design,
    lib: &Library,
    ev: &mut Evaluator,
    vals: &Values,
    arr: &Arrivals,
    w: &Worst,
) -> (Vec<RawStep>, String) {
    let ei = if w.edge == Edge::Rise { 0 } else { 1 };
    let preds = &arr.preds[ei * arr.groups + w.group];
    let mut rev: Vec<RawStep> = Vec::new();
    let mut s = design.captures[w.capture].signal;
    loop {
        match preds[s] {
            Pred::Arc(ai) => {
                let a = &design.arcs[ai];
                let label = design.delay_label(lib, &a.delay);
                rev.push(RawStep::of(
                    label,
                    design.signals[s].clone(),
                    &vals.arcs[ai],
                ));
                s = a.from;
            }
            Pred::Launch(li) => {
                let l = &design.launches[li];
                let (v, _) = vals.launches[li];
                let label = design.delay_label(lib, &l.delay);
                rev.push(RawStep::of(label, design.signals[s].clone(), &v));
                for d in l.clock_via.iter().rev() {
                    let cv = ev.eval(d);
                    rev.push(RawStep::of(design.delay_label(lib, d), String::new(), &cv));
                }
                return (rev, l.name.clone());
            }
            Pred::None => return (rev, String::new()),
        }
    }
}

/// The setup step and, when the capture clock is late, its latency as a negative step.
fn capture_steps(
    design: &Design,
    lib: &Library,
    cv: &CaptureValues,
    cap: &Capture,
    steps: &mut Vec<Step>,
    mut at: f64,
) {
    if let (Some(sv), Some(sd)) = (&cv.setup, &cap.setup) {
        at += sv.late;
        steps.push(Step {
            through: format!("setup {}", design.delay_label(lib, sd)),
            signal: String::new(),
            delay_ns: sv.late,
            at_ns: at,
            estimate_ns: differs(sv.late_est, sv.late),
            model_err_pct: sv.err_pct,
        });
    }
    let ce = cv.clock.early;
    if ce > 0.0 {
        at -= ce;
        steps.push(Step {
            through: format!(
                "capture clock latency ({}{})",
                design.clock_name,
                cap.edge.arrow()
            ),
            signal: String::new(),
            delay_ns: -ce,
            at_ns: at,
            estimate_ns: None,
            model_err_pct: None,
        });
    }
}

/// The estimate when it differs from the guaranteed value.
fn differs(est: f64, value: f64) -> Option<f64> {
    ((est - value).abs() > 1e-9 * value.abs().max(1.0)).then_some(est)
}

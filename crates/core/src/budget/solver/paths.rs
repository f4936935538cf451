//! The critical path of each phase, walked back from its slowest capture to the launching
//! clock edge, with every step's delay and arrival time.

use super::evaluate::{CaptureValues, Evaluator, Values};
use super::propagate::{Arrivals, Pred, Worst};
use super::types::{CriticalPaths, Path, Phase, Step};
use crate::budget::design::model::{Capture, Design, Edge};
use crate::budget::library::model::Library;

/// A step before its arrival time is known: through, signal, delay, model error.
type RawStep = (String, String, f64, Option<f64>);

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
    rev.push((
        format!("{}{}", design.clock_name, w.edge.arrow()),
        String::new(),
        0.0,
        None,
    ));
    let mut at = 0.0;
    let mut steps: Vec<Step> = rev
        .into_iter()
        .rev()
        .map(|(through, signal, delay_ns, err)| {
            at += delay_ns;
            Step {
                through,
                signal,
                delay_ns,
                at_ns: at,
                model_err_pct: err,
            }
        })
        .collect();
    capture_steps(design, lib, vals.captures[w.capture], cap, &mut steps, at);
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
    let mut rev: Vec<RawStep> = Vec::new();
    let mut s = design.captures[w.capture].signal;
    loop {
        match arr.preds[ei][s] {
            Pred::Arc(ai) => {
                let a = &design.arcs[ai];
                let v = vals.arcs[ai];
                let label = design.delay_label(lib, &a.delay);
                rev.push((label, design.signals[s].clone(), v.late, v.err_pct));
                s = a.from;
            }
            Pred::Launch(li) => {
                let l = &design.launches[li];
                let (v, _) = vals.launches[li];
                let label = design.delay_label(lib, &l.delay);
                rev.push((label, design.signals[s].clone(), v.late, v.err_pct));
                for d in l.clock_via.iter().rev() {
                    let cv = ev.eval(d);
                    rev.push((
                        design.delay_label(lib, d),
                        String::new(),
                        cv.late,
                        cv.err_pct,
                    ));
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
    cv: CaptureValues,
    cap: &Capture,
    steps: &mut Vec<Step>,
    mut at: f64,
) {
    if let (Some(sv), Some(sd)) = (cv.setup, &cap.setup) {
        at += sv.late;
        steps.push(Step {
            through: format!("setup {}", design.delay_label(lib, sd)),
            signal: String::new(),
            delay_ns: sv.late,
            at_ns: at,
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
            model_err_pct: None,
        });
    }
}

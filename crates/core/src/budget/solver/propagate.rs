//! Arrival times over the graph, from each clock edge separately: the latest (late corner) and
//! earliest (min corner) arrival at every signal, then each capture's setup requirement and the
//! inputs of its hold check. Launched ↑ captured ↓ → high phase; ↓ then ↑ → low phase; same
//! edge → a full period.

use super::evaluate::Values;
use super::types::{Endpoint, Phase};
use crate::budget::design::model::{Design, Edge};

/// What set a signal's latest arrival.
#[derive(Clone, Copy)]
pub(super) enum Pred {
    None,
    Launch(usize),
    Arc(usize),
}

/// The slowest endpoint of a phase: its requirement, capture and launching edge.
#[derive(Clone, Copy)]
pub(super) struct Worst {
    pub required_ns: f64,
    pub capture: usize,
    pub edge: Edge,
}

/// A hold check waiting for the clock (its credit is the opposite phase).
pub(super) struct PendingHold {
    pub capture: String,
    pub phase: Phase,
    pub early_ns: f64,
    pub hold_ns: f64,
    /// Late capture clock latency: it delays the capturing edge.
    pub clock_late_ns: f64,
    /// Whether every minimum delay on the earliest path is known.
    pub known: bool,
}

/// Arrival times of a design at one operating point.
pub(super) struct Arrivals {
    pub endpoints: Vec<Endpoint>,
    pub holds: Vec<PendingHold>,
    /// Slowest endpoint per phase, indexed by `Phase as usize`.
    pub worst: [Option<Worst>; 3],
    /// Per launching edge (rise, fall), what set each signal's latest arrival.
    pub preds: [Vec<Pred>; 2],
}

impl Arrivals {
    /// L, H or P: the requirement of the slowest endpoint of a phase (0 when none).
    pub fn required_ns(&self, p: Phase) -> f64 {
        self.worst[p as usize].map_or(0.0, |w| w.required_ns.max(0.0))
    }
}

/// Latest and earliest arrival at each signal after one clock edge.
struct Times {
    late: Vec<f64>,
    early: Vec<f64>,
    early_known: Vec<bool>,
    pred: Vec<Pred>,
}

/// Propagate from the rising, then the falling edge, and check every capture reached.
pub(super) fn arrivals(design: &Design, vals: &Values) -> Arrivals {
    let mut out = Arrivals {
        endpoints: Vec::new(),
        holds: Vec::new(),
        worst: [None, None, None],
        preds: [Vec::new(), Vec::new()],
    };
    for (ei, edge) in [Edge::Rise, Edge::Fall].into_iter().enumerate() {
        let times = from_edge(design, vals, edge);
        check_captures(design, vals, edge, &times, &mut out);
        out.preds[ei] = times.pred;
    }
    out
}

fn from_edge(design: &Design, vals: &Values, edge: Edge) -> Times {
    let n = design.signals.len();
    let mut t = Times {
        late: vec![f64::NEG_INFINITY; n],
        early: vec![f64::INFINITY; n],
        early_known: vec![true; n],
        pred: vec![Pred::None; n],
    };
    for (li, l) in design.launches.iter().enumerate() {
        if l.edge != edge {
            continue;
        }
        let (v, clk) = vals.launches[li];
        let a = clk.late + v.late;
        if a > t.late[l.to] {
            t.late[l.to] = a;
            t.pred[l.to] = Pred::Launch(li);
        }
        let e = clk.early + v.early;
        if e < t.early[l.to] {
            t.early[l.to] = e;
            t.early_known[l.to] = clk.known && v.early_known;
        }
    }
    for &s in &design.order {
        if t.late[s] == f64::NEG_INFINITY {
            continue;
        }
        for &ai in &design.fanout[s] {
            let to = design.arcs[ai].to;
            let v = vals.arcs[ai];
            let a = t.late[s] + v.late;
            if a > t.late[to] {
                t.late[to] = a;
                t.pred[to] = Pred::Arc(ai);
            }
            let e = t.early[s] + v.early;
            if e < t.early[to] {
                t.early[to] = e;
                t.early_known[to] = t.early_known[s] && v.early_known;
            }
        }
    }
    t
}

fn check_captures(design: &Design, vals: &Values, edge: Edge, t: &Times, out: &mut Arrivals) {
    for (ci, c) in design.captures.iter().enumerate() {
        let arrival = t.late[c.signal];
        if arrival == f64::NEG_INFINITY {
            continue;
        }
        let phase = Phase::of(edge, c.edge);
        let cv = vals.captures[ci];
        let setup_ns = cv.setup.map_or(0.0, |s| s.late);
        // capture clock latency delays the capturing edge; its minimum helps setup
        let required = arrival + setup_ns - cv.clock.early;
        out.endpoints.push(Endpoint {
            capture: c.name.clone(),
            phase,
            arrival_ns: arrival,
            setup_ns,
            required_ns: required,
            slack_ns: None,
        });
        let slot = phase as usize;
        if out.worst[slot].is_none_or(|w| required > w.required_ns) {
            out.worst[slot] = Some(Worst {
                required_ns: required,
                capture: ci,
                edge,
            });
        }
        if let Some(h) = cv.hold {
            out.holds.push(PendingHold {
                capture: c.name.clone(),
                phase,
                early_ns: t.early[c.signal],
                hold_ns: h.late,
                clock_late_ns: cv.clock.late,
                known: t.early_known[c.signal],
            });
        }
    }
}

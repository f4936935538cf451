//! Arrival times over the graph, from each clock edge separately: the latest (late corner) and
//! earliest (min corner) arrival at every signal, then each capture's setup requirement and the
//! inputs of its hold check. Launched ↑ captured ↓ → high phase; ↓ then ↑ → low phase; same
//! edge → a full period.
//!
//! With the common clock credit asked for, launches are propagated in groups of the same clock
//! buffer chain, so each capture knows which chain its data came through: the shared start of
//! the launch and capture chains counts its late value on one side and its early value on the
//! other, and that difference is given back, on same-edge (full-period) paths only, where the
//! shared buffers carry the same transition.

use super::evaluate::{Eval, Values};
use super::types::{Endpoint, Phase};
use crate::budget::design::model::{Design, Edge};

/// What set a signal's latest arrival.
#[derive(Clone, Copy)]
pub(super) enum Pred {
    None,
    Launch(usize),
    Arc(usize),
}

/// The slowest endpoint of a phase: its requirement, capture, launching edge and launch group.
#[derive(Clone, Copy)]
pub(super) struct Worst {
    pub required_ns: f64,
    pub capture: usize,
    pub edge: Edge,
    pub group: usize,
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
    /// Common clock path credit.
    pub credit_ns: f64,
}

/// Arrival times of a design at one operating point.
pub(super) struct Arrivals {
    pub endpoints: Vec<Endpoint>,
    pub holds: Vec<PendingHold>,
    /// Slowest endpoint per phase, indexed by `Phase as usize`.
    pub worst: [Option<Worst>; 3],
    /// Per launching edge (rise, fall) and launch group, what set each signal's latest
    /// arrival: index `edge × groups + group`.
    pub preds: Vec<Vec<Pred>>,
    pub groups: usize,
}

impl Arrivals {
    /// L, H or P: the requirement of the slowest endpoint of a phase (0 when none).
    pub fn required_ns(&self, p: Phase) -> f64 {
        self.worst[p as usize].map_or(0.0, |w| w.required_ns.max(0.0))
    }
}

/// Launches grouped by their clock buffer chain (one group for all when no credit is asked).
pub(super) struct Groups {
    /// Group of each launch.
    pub of_launch: Vec<usize>,
    /// One launch of each group (its chain stands for the group's).
    pub first: Vec<usize>,
    pub credit: bool,
}

impl Groups {
    pub fn of(design: &Design, credit: bool) -> Groups {
        if !credit {
            return Groups {
                of_launch: vec![0; design.launches.len()],
                first: vec![0],
                credit,
            };
        }
        let mut first: Vec<usize> = Vec::new();
        let of_launch = design
            .launches
            .iter()
            .enumerate()
            .map(|(li, l)| {
                match first
                    .iter()
                    .position(|&f| design.launches[f].clock_via == l.clock_via)
                {
                    Some(g) => g,
                    None => {
                        first.push(li);
                        first.len() - 1
                    }
                }
            })
            .collect();
        Groups {
            of_launch,
            first,
            credit,
        }
    }
}

/// Latest and earliest arrival at each signal after one clock edge.
struct Times {
    late: Vec<f64>,
    early: Vec<f64>,
    early_known: Vec<bool>,
    pred: Vec<Pred>,
}

/// Propagate from the rising, then the falling edge (per launch group), and check every capture
/// reached; `est` uses the estimate's late values instead of the guaranteed ones.
pub(super) fn arrivals(design: &Design, vals: &Values, groups: &Groups, est: bool) -> Arrivals {
    let ng = groups.first.len();
    let mut out = Arrivals {
        endpoints: Vec::new(),
        holds: Vec::new(),
        worst: [None, None, None],
        preds: Vec::with_capacity(2 * ng),
        groups: ng,
    };
    for edge in [Edge::Rise, Edge::Fall] {
        for g in 0..ng {
            let times = from_edge(design, vals, edge, groups, g, est);
            check_captures(design, vals, edge, groups, g, &times, est, &mut out);
            out.preds.push(times.pred);
        }
    }
    out
}

fn late_of(v: &Eval, est: bool) -> f64 {
    if est { v.late_est } else { v.late }
}

fn from_edge(
    design: &Design,
    vals: &Values,
    edge: Edge,
    groups: &Groups,
    g: usize,
    est: bool,
) -> Times {
    let n = design.signals.len();
    let mut t = Times {
        late: vec![f64::NEG_INFINITY; n],
        early: vec![f64::INFINITY; n],
        early_known: vec![true; n],
        pred: vec![Pred::None; n],
    };
    for (li, l) in design.launches.iter().enumerate() {
        if l.edge != edge || groups.of_launch[li] != g {
            continue;
        }
        let (v, clk) = vals.launches[li];
        let a = if est { clk.late_est } else { clk.late } + late_of(&v, est);
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
            let v = &vals.arcs[ai];
            let a = t.late[s] + late_of(v, est);
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

/// The pessimism of the clock buffers a launch group and a capture share: each shared buffer
/// counts late on one side and early on the other.
fn common_credit(
    design: &Design,
    vals: &Values,
    groups: &Groups,
    g: usize,
    ci: usize,
    est: bool,
) -> f64 {
    let li = groups.first[g];
    let launch = &design.launches[li].clock_via;
    let capture = &design.captures[ci].clock_via;
    launch
        .iter()
        .zip(capture)
        .take_while(|(a, b)| a == b)
        .enumerate()
        .map(|(k, _)| {
            let v = &vals.launch_via[li][k];
            late_of(v, est) - v.early
        })
        .sum()
}

#[allow(clippy::too_many_arguments)]
fn check_captures(
    design: &Design,
    vals: &Values,
    edge: Edge,
    groups: &Groups,
    g: usize,
    t: &Times,
    est: bool,
    out: &mut Arrivals,
) {
    for (ci, c) in design.captures.iter().enumerate() {
        let arrival = t.late[c.signal];
        if arrival == f64::NEG_INFINITY {
            continue;
        }
        let phase = Phase::of(edge, c.edge);
        let cv = &vals.captures[ci];
        let credit = if groups.credit && phase == Phase::Period {
            common_credit(design, vals, groups, g, ci, est)
        } else {
            0.0
        };
        let setup_ns = cv.setup.as_ref().map_or(0.0, |s| late_of(s, est));
        // capture clock latency delays the capturing edge; its minimum helps setup
        let required = arrival + setup_ns - cv.clock.early - credit;
        let slot = phase as usize;
        if out.worst[slot].is_none_or(|w| required > w.required_ns) {
            out.worst[slot] = Some(Worst {
                required_ns: required,
                capture: ci,
                edge,
                group: g,
            });
        }
        if est {
            continue;
        }
        out.endpoints.push(Endpoint {
            capture: c.name.clone(),
            phase,
            arrival_ns: arrival,
            setup_ns,
            required_ns: required,
            slack_ns: None,
        });
        if let Some(h) = &cv.hold {
            out.holds.push(PendingHold {
                capture: c.name.clone(),
                phase,
                early_ns: t.early[c.signal],
                hold_ns: h.late,
                clock_late_ns: cv.clock.late,
                known: t.early_known[c.signal],
                credit_ns: credit,
            });
        }
    }
}

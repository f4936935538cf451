//! The signal graph: topological order (Kahn), one combinational loop when there is no order,
//! and which captures any launch reaches.

use super::model::{Design, GraphArc};

/// Signals in topological order and each signal's outgoing arcs.
pub(super) struct Order {
    /// Signals, every arc's source before its target.
    pub order: Vec<usize>,
    /// For each signal, the arcs leaving it (indices into the arcs).
    pub fanout: Vec<Vec<usize>>,
}

/// Order the `signals` signals of the graph; a loop is returned as its arcs, in order.
pub(super) fn topological_order(arcs: &[GraphArc], signals: usize) -> Result<Order, Vec<usize>> {
    let n = signals;
    let mut fanout = vec![Vec::new(); n];
    let mut indeg = vec![0usize; n];
    for (i, a) in arcs.iter().enumerate() {
        fanout[a.from].push(i);
        indeg[a.to] += 1;
    }
    let mut order = Vec::with_capacity(n);
    let mut stack: Vec<usize> = (0..n).filter(|&s| indeg[s] == 0).collect();
    while let Some(s) = stack.pop() {
        order.push(s);
        for &ai in &fanout[s] {
            let t = arcs[ai].to;
            indeg[t] -= 1;
            if indeg[t] == 0 {
                stack.push(t);
            }
        }
    }
    if order.len() < n {
        return Err(find_cycle(arcs, &indeg));
    }
    Ok(Order { order, fanout })
}

/// Find one cycle among the nodes Kahn's sort left behind; returns arc indices along it, in order.
///
/// Every node left behind still has a predecessor left behind, so walking backwards always
/// closes a loop (walking forwards could stop at a node merely downstream of one).
fn find_cycle(arcs: &[GraphArc], indeg: &[usize]) -> Vec<usize> {
    let n = indeg.len();
    let mut fanin: Vec<Vec<usize>> = vec![Vec::new(); n];
    for (i, a) in arcs.iter().enumerate() {
        if indeg[a.from] > 0 && indeg[a.to] > 0 {
            fanin[a.to].push(i);
        }
    }
    let mut node = (0..n).find(|&s| indeg[s] > 0).unwrap_or(0);
    let mut seen_at = vec![usize::MAX; n];
    let mut back: Vec<usize> = Vec::new();
    while seen_at[node] == usize::MAX {
        seen_at[node] = back.len();
        let Some(&arc) = fanin[node].first() else {
            break;
        };
        back.push(arc);
        node = arcs[arc].from;
    }
    let mut cycle = back[seen_at[node].min(back.len())..].to_vec();
    cycle.reverse();
    cycle
}

/// One warning for each capture that no launch reaches (it is not timed).
pub(super) fn unreached_captures(design: &Design) -> Vec<String> {
    let mut reached = vec![false; design.signals.len()];
    for l in &design.launches {
        reached[l.to] = true;
    }
    for &s in &design.order {
        if reached[s] {
            for &ai in &design.fanout[s] {
                reached[design.arcs[ai].to] = true;
            }
        }
    }
    design
        .captures
        .iter()
        .filter(|c| !reached[c.signal])
        .map(|c| {
            format!(
                "capture \"{}\" is not reached by any launch: it is not timed",
                c.name
            )
        })
        .collect()
}

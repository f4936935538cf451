//! The supply a budget is derated at: each board section at its own rail's minimum when the
//! design names its rail, else the lowest rail; budgets at those supplies, each solved once.

use std::collections::HashMap;

use crate::budget::{Budget, Corner, Design, Library, OperatingPoint, solve};

use super::types::MarginConfig;

/// An operating point from measured rail minima, and where it came from.
pub(super) struct Supply {
    /// The point (typical corner: the caller sets the corner).
    pub op: OperatingPoint,
    /// Where the supply came from, in words.
    pub source: String,
    /// Caveats (a rail the design names that the recording lacks).
    pub notes: Vec<String>,
}

/// Rail minima (name, mV) as measured over some stretch of time.
pub(super) type RailMinima<'a> = &'a [(&'a str, Option<f64>)];

/// The operating point at these rail minima (or the supply `cfg` gives).
pub(super) fn supply(design: &Design, cfg: &MarginConfig, rails: RailMinima<'_>) -> Supply {
    let mut op = OperatingPoint::of(design);
    if let Some(t) = cfg.temp_c {
        op.temp_c = t;
    }
    let mut notes = Vec::new();
    let mut source = format!("design operating point ({:.3} V)", op.vcc_v);
    let lowest = rails
        .iter()
        .filter_map(|(n, m)| m.map(|m| (*n, m)))
        .min_by(|a, b| a.1.total_cmp(&b.1));
    if let Some(v) = cfg.vcc_v {
        op.vcc_v = v;
        source = format!("given ({v:.3} V)");
    } else if let Some((name, mv)) = lowest {
        op.vcc_v = mv / 1000.0;
        source = format!("lowest measured rail {name} (its minimum)");
        for s in &design.sections {
            let Some(label) = s.rail.as_ref() else {
                continue;
            };
            match rails.iter().find(|(n, _)| n == label) {
                Some((_, Some(m))) => {
                    op.section_vcc_v.insert(s.name.clone(), m / 1000.0);
                }
                Some((_, None)) => {}
                None => notes.push(format!(
                    "the design's section {} names rail {label}, which the recording does not have (rails: {}): the lowest rail stands in",
                    s.name,
                    rails.iter().map(|r| r.0).collect::<Vec<_>>().join(", ")
                )),
            }
        }
        if !op.section_vcc_v.is_empty() {
            source = "each board section at its own measured rail's minimum".into();
        }
    } else {
        notes.push("no rail was measured: the design's supply is used".into());
    }
    Supply { op, source, notes }
}

/// Budgets of one design, solved once per operating point and corner.
pub(super) struct Budgets<'a> {
    design: &'a Design,
    lib: &'a Library,
    solved: HashMap<Vec<u64>, Budget>,
}

impl<'a> Budgets<'a> {
    pub(super) fn new(design: &'a Design, lib: &'a Library) -> Budgets<'a> {
        Budgets {
            design,
            lib,
            solved: HashMap::new(),
        }
    }

    /// The budget at `op` and `corner` (requirements only: no clock held against it).
    pub(super) fn at(&mut self, op: &OperatingPoint, corner: Corner) -> &Budget {
        let mut key = vec![
            op.vcc_v.to_bits(),
            op.temp_c.to_bits(),
            u64::from(corner == Corner::Max),
        ];
        for (name, v) in &op.section_vcc_v {
            key.push(name.len() as u64);
            key.extend(name.bytes().map(u64::from));
            key.push(v.to_bits());
        }
        let (design, lib) = (self.design, self.lib);
        self.solved.entry(key).or_insert_with(|| {
            let mut o = op.clone();
            o.corner = corner;
            solve(design, lib, &o, None, None)
        })
    }
}

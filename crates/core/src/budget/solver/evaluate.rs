//! Every delay element of a design evaluated once at the operating point: late (the chosen
//! corner) and early (min corner) values, with the derating notes they raise.

use std::collections::BTreeSet;

use super::types::OperatingPoint;
use crate::budget::derate::{self, Conditions, Corner, Notes};
use crate::budget::design::model::{Delay, Design};
use crate::budget::library::model::Library;

/// Late and early value of one delay element at the operating point.
#[derive(Clone, Copy)]
pub(super) struct Eval {
    pub late: f64,
    pub early: f64,
    pub early_known: bool,
    pub err_pct: Option<f64>,
}

/// A chain of clock buffers summed: late, early, and whether every early value is known.
#[derive(Clone, Copy)]
pub(super) struct Latency {
    pub late: f64,
    pub early: f64,
    pub known: bool,
}

/// Evaluates delays at one operating point and collects the notes they raise.
pub(super) struct Evaluator<'a> {
    design: &'a Design,
    lib: &'a Library,
    op: &'a OperatingPoint,
    /// (instance × 4096 + arc, note bits other than "min unknown" and "not derated").
    pub notes: BTreeSet<(usize, u16)>,
    section_vcc: Vec<f64>,
}

impl<'a> Evaluator<'a> {
    pub fn new(design: &'a Design, lib: &'a Library, op: &'a OperatingPoint) -> Evaluator<'a> {
        let section_vcc = design
            .sections
            .iter()
            .map(|s| op.section_vcc_v.get(&s.name).copied().unwrap_or(op.vcc_v))
            .collect();
        Evaluator {
            design,
            lib,
            op,
            notes: BTreeSet::new(),
            section_vcc,
        }
    }

    /// Supply, temperature and load of one part instance.
    pub fn conditions(&self, instance: usize) -> Conditions {
        let inst = &self.design.instances[instance];
        Conditions {
            vcc_v: inst.section.map_or(self.op.vcc_v, |s| self.section_vcc[s]),
            temp_c: self.op.temp_c,
            load_pf: inst.load_pf,
        }
    }

    pub fn eval(&mut self, d: &Delay) -> Eval {
        match d {
            Delay::Fixed {
                min_ns,
                typ_ns,
                max_ns,
                ..
            } => Eval {
                late: match self.op.corner {
                    Corner::Typ => typ_ns.unwrap_or(*max_ns),
                    Corner::Min => min_ns.unwrap_or(0.0),
                    Corner::Max => *max_ns,
                },
                early: min_ns.unwrap_or(0.0),
                early_known: min_ns.is_some(),
                err_pct: None,
            },
            Delay::Part {
                instance,
                arc,
                scale,
            } => {
                let c = self.conditions(*instance);
                let part = self.design.instances[*instance].part;
                let late = derate::eval(self.lib, part, *arc, self.op.corner, &c);
                let early = derate::eval(self.lib, part, *arc, Corner::Min, &c);
                let flagged = late.notes.0 & !(Notes::MIN_UNKNOWN.0 | Notes::NOT_DERATED.0);
                if flagged != 0 {
                    self.notes.insert((*instance * 4096 + *arc, flagged));
                }
                let p = &self.lib.parts[part];
                let fam = &self.lib.families[p.family];
                let err_pct = derate::row_error_pct(
                    &p.arcs[*arc].worst[0].series,
                    fam.shape.as_ref(),
                    c.vcc_v,
                );
                Eval {
                    late: late.ns.unwrap_or(0.0) * scale,
                    early: early.ns.unwrap_or(0.0) * scale,
                    early_known: early.ns.is_some(),
                    err_pct,
                }
            }
        }
    }

    fn chain(&mut self, list: &[Delay]) -> Latency {
        list.iter().fold(
            Latency {
                late: 0.0,
                early: 0.0,
                known: true,
            },
            |acc, d| {
                let v = self.eval(d);
                Latency {
                    late: acc.late + v.late,
                    early: acc.early + v.early,
                    known: acc.known && v.early_known,
                }
            },
        )
    }
}

/// A capture's setup, hold and clock latency at the operating point.
#[derive(Clone, Copy)]
pub(super) struct CaptureValues {
    pub setup: Option<Eval>,
    pub hold: Option<Eval>,
    pub clock: Latency,
}

/// Every element of the design at the operating point, evaluated once.
pub(super) struct Values {
    /// Per arc.
    pub arcs: Vec<Eval>,
    /// Per launch: its clock-to-output arc and its clock latency.
    pub launches: Vec<(Eval, Latency)>,
    /// Per capture.
    pub captures: Vec<CaptureValues>,
}

impl Values {
    pub fn of(design: &Design, ev: &mut Evaluator) -> Values {
        let arcs = design.arcs.iter().map(|a| ev.eval(&a.delay)).collect();
        let launches = design
            .launches
            .iter()
            .map(|l| (ev.eval(&l.delay), ev.chain(&l.clock_via)))
            .collect();
        let captures = design
            .captures
            .iter()
            .map(|c| CaptureValues {
                setup: c.setup.as_ref().map(|d| ev.eval(d)),
                hold: c.hold.as_ref().map(|d| ev.eval(d)),
                clock: ev.chain(&c.clock_via),
            })
            .collect();
        Values {
            arcs,
            launches,
            captures,
        }
    }
}

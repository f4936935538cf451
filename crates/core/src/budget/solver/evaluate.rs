//! Every delay element of a design evaluated once at the operating point: late (the chosen
//! corner, by the guaranteed rule and by the estimate) and early (min corner) values, with the
//! derating notes they raise; and the clocked parts' own limits (pulse widths, f_max).

use std::collections::{BTreeSet, HashMap};

use super::types::{LimitKind, OperatingPoint};
use crate::budget::derate::{self, Conditions, Corner, Notes};
use crate::budget::design::model::{Delay, Design, Edge};
use crate::budget::library::model::{ActiveEdge, ArcKind, Library};

/// Late and early value of one delay element at the operating point.
#[derive(Clone, Copy)]
pub(super) struct Eval {
    /// By the guaranteed rule.
    pub late: f64,
    /// By the estimate.
    pub late_est: f64,
    pub early: f64,
    pub early_known: bool,
    /// The estimate's worst error, % (None: exact).
    pub err_pct: Option<f64>,
}

/// A chain of clock buffers summed: late, early, and whether every early value is known.
#[derive(Clone, Copy)]
pub(super) struct Latency {
    pub late: f64,
    pub late_est: f64,
    pub early: f64,
    pub known: bool,
}

/// Evaluates delays at one operating point and collects the notes they raise.
pub(super) struct Evaluator<'a> {
    design: &'a Design,
    lib: &'a Library,
    op: &'a OperatingPoint,
    /// (instance × 4096 + arc, note bits worth a warning).
    pub notes: BTreeSet<(usize, u16)>,
    /// Every note bit raised by any value.
    pub all_notes: Notes,
    /// The union of the estimate error ranges of the values used, % (low, high).
    pub err_range: Option<(f64, f64)>,
    section_vcc: Vec<f64>,
    /// Each (instance, arc, corner) evaluated once: an instance's conditions are fixed, and
    /// designs use the same part arc on many signals.
    cache: HashMap<(usize, usize, Corner), derate::Value>,
    /// Clocked part types (with the clock pin) whose library rows give no minimum clock pulse
    /// width: nothing bounds the phases by them, and the report says so.
    pub no_pulse_width: BTreeSet<(String, String)>,
}

/// Note bits that are said once for the whole budget rather than per arc.
const GLOBAL_NOTES: u16 = Notes::MIN_UNKNOWN.0 | Notes::NOT_DERATED.0 | Notes::BETWEEN_COLUMNS.0;

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
            all_notes: Notes::default(),
            err_range: None,
            section_vcc,
            cache: HashMap::new(),
            no_pulse_width: BTreeSet::new(),
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

    /// One library arc of an instance at a corner, its notes recorded.
    fn part_value(&mut self, instance: usize, arc: usize, corner: Corner) -> derate::Value {
        if let Some(v) = self.cache.get(&(instance, arc, corner)) {
            return *v;
        }
        let c = self.conditions(instance);
        let part = self.design.instances[instance].part;
        let v = derate::eval(self.lib, part, arc, corner, &c);
        self.all_notes = self.all_notes.with(v.notes);
        let flagged = v.notes.0 & !GLOBAL_NOTES;
        if flagged != 0 {
            self.notes.insert((instance * 4096 + arc, flagged));
        }
        if let Some((lo, hi)) = v.est_err_pct {
            self.err_range = Some(match self.err_range {
                Some((a, b)) => (a.min(lo), b.max(hi)),
                None => (lo, hi),
            });
        }
        self.cache.insert((instance, arc, corner), v);
        v
    }

    pub fn eval(&mut self, d: &Delay) -> Eval {
        match d {
            Delay::Fixed {
                min_ns,
                typ_ns,
                max_ns,
                ..
            } => {
                let late = match self.op.corner {
                    Corner::Typ => typ_ns.unwrap_or(*max_ns),
                    Corner::Min => min_ns.unwrap_or(0.0),
                    Corner::Max => *max_ns,
                };
                Eval {
                    late,
                    late_est: late,
                    early: min_ns.unwrap_or(0.0),
                    early_known: min_ns.is_some(),
                    err_pct: None,
                }
            }
            Delay::Part {
                instance,
                arc,
                scale,
                min_ns,
            } => {
                let late = self.part_value(*instance, *arc, self.op.corner);
                let (early, early_known) = match min_ns {
                    Some(m) => (*m, true),
                    None => {
                        let e = self.part_value(*instance, *arc, Corner::Min);
                        (e.ns.unwrap_or(0.0) * scale, e.ns.is_some())
                    }
                };
                let l = late.ns.unwrap_or(0.0) * scale;
                Eval {
                    late: l,
                    late_est: late.est_ns.map_or(l, |e| e * scale),
                    early,
                    early_known,
                    err_pct: late.est_err_pct.map(|(lo, hi)| lo.abs().max(hi.abs())),
                }
            }
        }
    }

    pub fn chain(&mut self, list: &[Delay]) -> (Latency, Vec<Eval>) {
        let evals: Vec<Eval> = list.iter().map(|d| self.eval(d)).collect();
        let lat = evals.iter().fold(
            Latency {
                late: 0.0,
                late_est: 0.0,
                early: 0.0,
                known: true,
            },
            |acc, v| Latency {
                late: acc.late + v.late,
                late_est: acc.late_est + v.late_est,
                early: acc.early + v.early,
                known: acc.known && v.early_known,
            },
        );
        (lat, evals)
    }

    /// The clocked parts' own limits on each master-clock phase (low, high, period): the
    /// largest by the guaranteed rule and by the estimate, with who sets the guaranteed one.
    /// Pulse widths are evaluated at the late corner like any arc.
    pub fn clock_limits(&mut self) -> [PartLimit; 3] {
        let mut out: [PartLimit; 3] = Default::default();
        let design = self.design;
        for ck in &design.clocked {
            let (instance, edge) = (ck.instance, ck.edge);
            let inst = &design.instances[instance];
            let part = &self.lib.parts[inst.part];
            // the part's own HIGH is the master's HIGH unless an inverter sits between them
            let inverted = (edge == Edge::Rise) != (part.clock_edge == ActiveEdge::Rise);
            if !part
                .arcs
                .iter()
                .any(|a| a.name == ck.pin && a.kind.is_clock_limit() && a.kind != ArcKind::Fmax)
            {
                self.no_pulse_width
                    .insert((part.type_name.clone(), ck.pin.clone()));
            }
            for (ai, a) in part.arcs.iter().enumerate() {
                if a.name != ck.pin {
                    continue;
                }
                let slots: &[usize] = match (a.kind, inverted) {
                    (ArcKind::PulseWidth, _) => &[0, 1],
                    (ArcKind::PulseHigh, false) | (ArcKind::PulseLow, true) => &[1],
                    (ArcKind::PulseLow, false) | (ArcKind::PulseHigh, true) => &[0],
                    (ArcKind::Fmax, _) => &[2],
                    _ => continue,
                };
                let v = self.part_value(instance, ai, self.op.corner);
                let (b, e) = (v.ns.unwrap_or(0.0), v.est_ns.unwrap_or(0.0));
                for &s in slots {
                    let slot = &mut out[s];
                    slot.est_ns = slot.est_ns.max(e);
                    if b > slot.ns {
                        slot.ns = b;
                        slot.kind = if a.kind == ArcKind::Fmax {
                            LimitKind::PartFmax
                        } else {
                            LimitKind::PulseWidth
                        };
                        slot.by = if a.kind == ArcKind::Fmax {
                            format!(
                                "{} {} f_max {:.1} MHz",
                                inst.reference,
                                part.type_name,
                                1000.0 / b
                            )
                        } else {
                            format!(
                                "{} {} {} minimum {} {b:.0} ns",
                                inst.reference,
                                part.type_name,
                                a.name,
                                match a.kind {
                                    ArcKind::PulseWidth => "pulse width",
                                    ArcKind::PulseHigh => "HIGH time",
                                    _ => "LOW time",
                                }
                            )
                        };
                    }
                }
            }
        }
        out
    }
}

/// A clocked part's limit on one phase.
#[derive(Clone, Debug)]
pub(super) struct PartLimit {
    pub ns: f64,
    pub est_ns: f64,
    pub kind: LimitKind,
    pub by: String,
}

impl Default for PartLimit {
    fn default() -> Self {
        PartLimit {
            ns: 0.0,
            est_ns: 0.0,
            kind: LimitKind::None,
            by: String::new(),
        }
    }
}

/// A capture's setup, hold and clock latency at the operating point.
#[derive(Clone)]
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
    /// Per launch: each clock buffer, for the common clock path credit.
    pub launch_via: Vec<Vec<Eval>>,
    /// Per capture.
    pub captures: Vec<CaptureValues>,
}

impl Values {
    pub fn of(design: &Design, ev: &mut Evaluator) -> Values {
        let arcs = design.arcs.iter().map(|a| ev.eval(&a.delay)).collect();
        let mut launches = Vec::with_capacity(design.launches.len());
        let mut launch_via = Vec::with_capacity(design.launches.len());
        for l in &design.launches {
            let v = ev.eval(&l.delay);
            let (lat, via) = ev.chain(&l.clock_via);
            launches.push((v, lat));
            launch_via.push(via);
        }
        let captures = design
            .captures
            .iter()
            .map(|c| {
                let (clock, _) = ev.chain(&c.clock_via);
                CaptureValues {
                    setup: c.setup.as_ref().map(|d| ev.eval(d)),
                    hold: c.hold.as_ref().map(|d| ev.eval(d)),
                    clock,
                }
            })
            .collect();
        Values {
            arcs,
            launches,
            launch_via,
            captures,
        }
    }
}

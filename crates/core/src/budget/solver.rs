//! Static timing analysis of a resolved design at one operating point, and the clock plan.
//!
//! Latest arrival (the chosen late corner) and earliest arrival (min corner) are propagated from
//! each clock edge separately, so every capture knows which phase its paths must fit:
//! launched ↑ captured ↓ → high phase; ↓ then ↑ → low phase; same edge → a full period.
//! Then L, H, P give d* = H/(L+H), T_min(d) = max(L/(1−d), H/d, P) and f_max.

use std::collections::{BTreeMap, BTreeSet};

use serde::Serialize;

use super::derate::{self, Conditions, Corner, Notes};
use super::design::{Delay, Design, Edge};
use super::library::{ArcKind, Library};

/// The phase a path must settle within.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Hash, PartialOrd, Ord)]
#[serde(rename_all = "lowercase")]
pub enum Phase {
    /// Launched on ↓, captured on ↑.
    Low,
    /// Launched on ↑, captured on ↓.
    High,
    /// Launched and captured on the same edge type.
    Period,
}

impl Phase {
    /// Which phase a launch/capture edge pair constrains.
    pub fn of(launch: Edge, capture: Edge) -> Phase {
        match (launch, capture) {
            (Edge::Fall, Edge::Rise) => Phase::Low,
            (Edge::Rise, Edge::Fall) => Phase::High,
            _ => Phase::Period,
        }
    }
    /// Lower-case name.
    pub fn name(self) -> &'static str {
        match self {
            Phase::Low => "low",
            Phase::High => "high",
            Phase::Period => "period",
        }
    }
}

/// Where the budget is evaluated.
#[derive(Clone, Debug, PartialEq)]
pub struct OperatingPoint {
    /// Supply for parts not in a section with its own value.
    pub vcc_v: f64,
    /// Supply per section name (e.g. measured on that section's rail).
    pub section_vcc_v: BTreeMap<String, f64>,
    /// Ambient temperature.
    pub temp_c: f64,
    /// Late corner (max or typ).
    pub corner: Corner,
}

impl OperatingPoint {
    /// The design's own operating point.
    pub fn of(design: &Design) -> OperatingPoint {
        OperatingPoint {
            vcc_v: design.operating.vcc_v,
            section_vcc_v: BTreeMap::new(),
            temp_c: design.operating.temp_c,
            corner: design.operating.corner,
        }
    }
}

/// One step of a timing path.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Step {
    /// What delays the signal: "U5 74HC04 A->Y", "CLK↑", "setup U7 74HC574 D->CLK".
    pub through: String,
    /// Signal reached (empty for clock and setup steps).
    pub signal: String,
    /// This step's delay.
    pub delay_ns: f64,
    /// Time after the launching edge when the step ends.
    pub at_ns: f64,
    /// Model error of this value in % (None: not derated or fixed).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub model_err_pct: Option<f64>,
}

/// The slowest path of a phase.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Path {
    /// Capture at its end.
    pub capture: String,
    /// Launch at its start.
    pub launch: String,
    /// Requirement on the phase: arrival + setup − capture clock latency.
    pub required_ns: f64,
    /// Steps, launch clock first, setup last.
    pub steps: Vec<Step>,
}

/// The critical path of each phase (absent when no path constrains it).
#[derive(Clone, Debug, Serialize, Default, PartialEq)]
pub struct CriticalPaths {
    /// Slowest low-phase path.
    pub low: Option<Path>,
    /// Slowest high-phase path.
    pub high: Option<Path>,
    /// Slowest full-period path.
    pub period: Option<Path>,
}

/// Setup requirement at one capture for paths from one edge type.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Endpoint {
    /// Capture name.
    pub capture: String,
    /// Phase constrained.
    pub phase: Phase,
    /// Latest data arrival after the launching edge.
    pub arrival_ns: f64,
    /// Setup time.
    pub setup_ns: f64,
    /// Phase length this endpoint needs.
    pub required_ns: f64,
    /// Slack against the given clock.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub slack_ns: Option<f64>,
}

/// Outcome of a hold check.
#[derive(Clone, Copy, Debug, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum HoldStatus {
    /// All minimum delays known, slack ≥ 0.
    Pass,
    /// All minimum delays known, slack < 0.
    Fail,
    /// Some minimum delay on the earliest path is not in the data sheet: counted as 0 ns, so
    /// the slack is a lower bound and the check is not passed silently.
    UnknownMin,
}

/// Hold check at one capture for paths from one edge type.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct HoldCheck {
    /// Capture name.
    pub capture: String,
    /// Phase of the paths checked.
    pub phase: Phase,
    /// Earliest arrival (unknown minima as 0).
    pub early_arrival_ns: f64,
    /// Hold time required.
    pub hold_ns: f64,
    /// early arrival + opposite phase (when a clock is given) − capture clock latency − hold.
    pub slack_ns: f64,
    /// Verdict.
    pub status: HoldStatus,
}

/// The clock a budget is held against.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct ClockInput {
    /// Frequency.
    pub freq_hz: f64,
    /// High-time fraction.
    pub duty: f64,
}

/// Slack of each phase against a given clock.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct ClockSlack {
    /// Clock frequency.
    pub clock_hz: f64,
    /// Clock duty (high fraction).
    pub clock_duty: f64,
    /// Low time of the clock.
    pub clock_low_ns: f64,
    /// High time of the clock.
    pub clock_high_ns: f64,
    /// Period of the clock.
    pub clock_period_ns: f64,
    /// Low time − L.
    pub low_slack_ns: f64,
    /// High time − H.
    pub high_slack_ns: f64,
    /// Period − P.
    pub period_slack_ns: f64,
    /// Low slack as a percentage of L (None when L = 0).
    pub low_slack_pct: Option<f64>,
    /// High slack as a percentage of H.
    pub high_slack_pct: Option<f64>,
    /// Period slack as a percentage of P.
    pub period_slack_pct: Option<f64>,
    /// Whether every phase has slack ≥ 0.
    pub meets: bool,
}

/// f_max at a chosen duty.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct DutyPoint {
    /// High-time fraction.
    pub duty: f64,
    /// Minimum period at that duty.
    pub min_period_ns: f64,
    /// Maximum frequency at that duty.
    pub fmax_hz: f64,
}

/// A voltage model used in this budget, reported with its fit error.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct ModelNote {
    /// Family.
    pub family: String,
    /// Model.
    pub model: String,
    /// RMS error of the fit, %.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fit_rms_pct: Option<f64>,
    /// Largest error of the fit at a data-sheet column, %.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub fit_max_pct: Option<f64>,
}

/// Everything the budget says about a design at one operating point.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Budget {
    /// Machine name.
    pub design: String,
    /// Supply used (sections may differ, see `section_vcc_v`).
    pub vcc_v: f64,
    /// Per-section supply where one was given.
    pub section_vcc_v: BTreeMap<String, f64>,
    /// Temperature used.
    pub temp_c: f64,
    /// Late corner used.
    pub corner: Corner,
    /// L: the low phase must last at least this long.
    pub low_required_ns: f64,
    /// H: the high phase must last at least this long.
    pub high_required_ns: f64,
    /// P: the period must last at least this long.
    pub period_required_ns: f64,
    /// d* = H/(L+H): the duty that allows the shortest period.
    pub best_duty: f64,
    /// T_min at d*.
    pub min_period_best_duty_ns: f64,
    /// f_max at d*.
    pub fmax_best_duty_hz: f64,
    /// T_min at 50 % duty.
    pub min_period_50_ns: f64,
    /// f_max at 50 % duty.
    pub fmax_50_hz: f64,
    /// f_max at the duty asked for.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub at_duty: Option<DutyPoint>,
    /// Slack against the clock asked for.
    #[serde(flatten)]
    pub clock: Option<ClockSlack>,
    /// Slowest path per phase.
    pub critical_paths: CriticalPaths,
    /// Every setup endpoint.
    pub endpoints: Vec<Endpoint>,
    /// Every hold check.
    pub holds: Vec<HoldCheck>,
    /// False when any part runs outside its data sheet's supply or temperature range.
    pub in_spec: bool,
    /// Out-of-spec conditions and other caveats, one sentence each.
    pub warnings: Vec<String>,
    /// Voltage models used.
    pub models: Vec<ModelNote>,
}

/// T_min(d) = max(L/(1−d), H/d, P).
pub fn min_period_ns(low_ns: f64, high_ns: f64, period_ns: f64, duty: f64) -> f64 {
    (low_ns / (1.0 - duty)).max(high_ns / duty).max(period_ns)
}

/// d* = H/(L+H) (0.5 when neither phase is constrained).
pub fn best_duty(low_ns: f64, high_ns: f64) -> f64 {
    if low_ns + high_ns > 0.0 {
        high_ns / (low_ns + high_ns)
    } else {
        0.5
    }
}

/// Slack of each phase of a clock against L, H, P.
pub fn clock_slack(low_ns: f64, high_ns: f64, period_ns: f64, clock: ClockInput) -> ClockSlack {
    let t = 1e9 / clock.freq_hz;
    let hi = t * clock.duty;
    let lo = t - hi;
    let pct = |slack: f64, req: f64| (req > 0.0).then(|| 100.0 * slack / req);
    let (ls, hs, ps) = (lo - low_ns, hi - high_ns, t - period_ns);
    ClockSlack {
        clock_hz: clock.freq_hz,
        clock_duty: clock.duty,
        clock_low_ns: lo,
        clock_high_ns: hi,
        clock_period_ns: t,
        low_slack_ns: ls,
        high_slack_ns: hs,
        period_slack_ns: ps,
        low_slack_pct: pct(ls, low_ns),
        high_slack_pct: pct(hs, high_ns),
        period_slack_pct: pct(ps, period_ns),
        meets: ls >= 0.0 && hs >= 0.0 && ps >= 0.0,
    }
}

/// Late and early value of one delay element at the operating point.
#[derive(Clone, Copy)]
struct Eval {
    late: f64,
    early: f64,
    early_known: bool,
    err_pct: Option<f64>,
}

struct Evaluator<'a> {
    design: &'a Design,
    lib: &'a Library,
    op: &'a OperatingPoint,
    notes: BTreeSet<(usize, u16)>,
    section_vcc: Vec<f64>,
}

impl Evaluator<'_> {
    fn conditions(&self, instance: usize) -> Conditions {
        let inst = &self.design.instances[instance];
        Conditions {
            vcc_v: inst.section.map_or(self.op.vcc_v, |s| self.section_vcc[s]),
            temp_c: self.op.temp_c,
            load_pf: inst.load_pf,
        }
    }

    fn eval(&mut self, d: &Delay) -> Eval {
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
}

#[derive(Clone, Copy)]
enum Pred {
    None,
    Launch(usize),
    Arc(usize),
}

/// Solve the design at an operating point; `clock` and `duty` add slack and f_max at that duty.
pub fn solve(
    design: &Design,
    lib: &Library,
    op: &OperatingPoint,
    clock: Option<ClockInput>,
    duty: Option<f64>,
) -> Budget {
    let section_vcc = design
        .sections
        .iter()
        .map(|s| op.section_vcc_v.get(&s.name).copied().unwrap_or(op.vcc_v))
        .collect();
    let mut ev = Evaluator {
        design,
        lib,
        op,
        notes: BTreeSet::new(),
        section_vcc,
    };
    let arc_vals: Vec<Eval> = design.arcs.iter().map(|a| ev.eval(&a.delay)).collect();
    let chain = |ev: &mut Evaluator, list: &[Delay]| -> (f64, f64, bool) {
        list.iter().fold((0.0, 0.0, true), |(l, e, k), d| {
            let v = ev.eval(d);
            (l + v.late, e + v.early, k && v.early_known)
        })
    };
    let launch_vals: Vec<(Eval, (f64, f64, bool))> = design
        .launches
        .iter()
        .map(|l| (ev.eval(&l.delay), chain(&mut ev, &l.clock_via)))
        .collect();
    // (setup, hold, capture clock latency as (late, early, early known))
    type CaptureVals = (Option<Eval>, Option<Eval>, (f64, f64, bool));
    let capture_vals: Vec<CaptureVals> = design
        .captures
        .iter()
        .map(|c| {
            let s = c.setup.as_ref().map(|d| ev.eval(d));
            let h = c.hold.as_ref().map(|d| ev.eval(d));
            (s, h, chain(&mut ev, &c.clock_via))
        })
        .collect();

    let n = design.signals.len();
    let mut endpoints = Vec::new();
    let mut holds = Vec::new();
    let mut worst: [Option<(f64, usize, Edge)>; 3] = [None, None, None];
    let mut preds: [Vec<Pred>; 2] = [vec![Pred::None; n], vec![Pred::None; n]];
    let mut late_all: [Vec<f64>; 2] = [vec![f64::NEG_INFINITY; n], vec![f64::NEG_INFINITY; n]];

    for (ei, edge) in [Edge::Rise, Edge::Fall].into_iter().enumerate() {
        let late = &mut late_all[ei];
        let pred = &mut preds[ei];
        let mut early = vec![f64::INFINITY; n];
        let mut early_known = vec![true; n];
        for (li, l) in design.launches.iter().enumerate() {
            if l.edge != edge {
                continue;
            }
            let (v, (cl, ce, ck)) = launch_vals[li];
            let a = cl + v.late;
            if a > late[l.to] {
                late[l.to] = a;
                pred[l.to] = Pred::Launch(li);
            }
            let e = ce + v.early;
            if e < early[l.to] {
                early[l.to] = e;
                early_known[l.to] = ck && v.early_known;
            }
        }
        for &s in &design.order {
            if late[s] == f64::NEG_INFINITY {
                continue;
            }
            for &ai in &design.fanout[s] {
                let t = design.arcs[ai].to;
                let v = arc_vals[ai];
                let a = late[s] + v.late;
                if a > late[t] {
                    late[t] = a;
                    pred[t] = Pred::Arc(ai);
                }
                let e = early[s] + v.early;
                if e < early[t] {
                    early[t] = e;
                    early_known[t] = early_known[s] && v.early_known;
                }
            }
        }
        for (ci, c) in design.captures.iter().enumerate() {
            let arrival = late[c.signal];
            if arrival == f64::NEG_INFINITY {
                continue;
            }
            let phase = Phase::of(edge, c.edge);
            let (setup, hold, (_cl, ce, _ck)) = capture_vals[ci];
            let setup_ns = setup.map_or(0.0, |s| s.late);
            // capture clock latency delays the capturing edge; its minimum helps setup
            let required = arrival + setup_ns - ce;
            endpoints.push(Endpoint {
                capture: c.name.clone(),
                phase,
                arrival_ns: arrival,
                setup_ns,
                required_ns: required,
                slack_ns: None,
            });
            let slot = phase as usize;
            if worst[slot].is_none_or(|(r, _, _)| required > r) {
                worst[slot] = Some((required, ci, edge));
            }
            if let Some(h) = hold {
                let (_, _, (cl_late, _, _)) = capture_vals[ci];
                let hold_ns = h.late;
                holds.push((
                    ci,
                    phase,
                    early[c.signal],
                    hold_ns,
                    cl_late,
                    early_known[c.signal],
                ));
            }
        }
    }

    let req = |p: Phase| worst[p as usize].map_or(0.0, |w| w.0.max(0.0));
    let (l, h, p) = (req(Phase::Low), req(Phase::High), req(Phase::Period));
    let d_star = best_duty(l, h);
    let t_best = min_period_ns(l, h, p, d_star);
    let t_50 = min_period_ns(l, h, p, 0.5);
    let clock_slack = clock.map(|c| clock_slack(l, h, p, c));

    for e in &mut endpoints {
        if let Some(c) = &clock_slack {
            let avail = match e.phase {
                Phase::Low => c.clock_low_ns,
                Phase::High => c.clock_high_ns,
                Phase::Period => c.clock_period_ns,
            };
            e.slack_ns = Some(avail - e.required_ns);
        }
    }
    let holds = holds
        .into_iter()
        .map(|(ci, phase, early, hold_ns, cap_clk_late, known)| {
            let credit = match (phase, &clock_slack) {
                (Phase::High, Some(c)) => c.clock_low_ns,
                (Phase::Low, Some(c)) => c.clock_high_ns,
                _ => 0.0,
            };
            let slack = early + credit - cap_clk_late - hold_ns;
            HoldCheck {
                capture: design.captures[ci].name.clone(),
                phase,
                early_arrival_ns: early,
                hold_ns,
                slack_ns: slack,
                status: if !known {
                    HoldStatus::UnknownMin
                } else if slack >= 0.0 {
                    HoldStatus::Pass
                } else {
                    HoldStatus::Fail
                },
            }
        })
        .collect();

    let path = |ev: &mut Evaluator, slot: usize| -> Option<Path> {
        let (required, ci, edge) = worst[slot]?;
        let ei = if edge == Edge::Rise { 0 } else { 1 };
        let cap = &design.captures[ci];
        let mut rev: Vec<(String, String, f64, Option<f64>)> = Vec::new();
        let mut s = cap.signal;
        let mut launch = String::new();
        loop {
            match preds[ei][s] {
                Pred::Arc(ai) => {
                    let a = &design.arcs[ai];
                    let v = arc_vals[ai];
                    rev.push((
                        design.delay_label(lib, &a.delay),
                        design.signals[s].clone(),
                        v.late,
                        v.err_pct,
                    ));
                    s = a.from;
                }
                Pred::Launch(li) => {
                    let l = &design.launches[li];
                    let (v, _) = launch_vals[li];
                    rev.push((
                        design.delay_label(lib, &l.delay),
                        design.signals[s].clone(),
                        v.late,
                        v.err_pct,
                    ));
                    for d in l.clock_via.iter().rev() {
                        let cv = ev.eval(d);
                        rev.push((
                            design.delay_label(lib, d),
                            String::new(),
                            cv.late,
                            cv.err_pct,
                        ));
                    }
                    launch = l.name.clone();
                    break;
                }
                Pred::None => break,
            }
        }
        rev.push((
            format!("{}{}", design.clock_name, edge.arrow()),
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
        let (setup, _, (_, ce, _)) = capture_vals[ci];
        if let (Some(sv), Some(sd)) = (setup, &cap.setup) {
            at += sv.late;
            steps.push(Step {
                through: format!("setup {}", design.delay_label(lib, sd)),
                signal: String::new(),
                delay_ns: sv.late,
                at_ns: at,
                model_err_pct: sv.err_pct,
            });
        }
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
        Some(Path {
            capture: cap.name.clone(),
            launch,
            required_ns: required,
            steps,
        })
    };
    let critical_paths = CriticalPaths {
        low: path(&mut ev, Phase::Low as usize),
        high: path(&mut ev, Phase::High as usize),
        period: path(&mut ev, Phase::Period as usize),
    };

    let mut warnings = design.warnings.clone();
    let mut in_spec = true;
    let mut seen = BTreeSet::new();
    for &(key, bits) in &ev.notes {
        let (instance, arc) = (key / 4096, key % 4096);
        let inst = &design.instances[instance];
        let part = &lib.parts[inst.part];
        let fam = &lib.families[part.family];
        let c = ev.conditions(instance);
        let notes = Notes(bits);
        if notes.has(Notes::VCC_OUT_OF_SPEC) && seen.insert((inst.reference.clone(), 1)) {
            in_spec = false;
            warnings.push(format!(
                "OUT OF SPEC: {} ({}) at {:.3} V is outside the {} range {}–{} V; its delays are extrapolated beyond the data sheet",
                inst.reference, part.type_name, c.vcc_v, fam.name, fam.vcc_min_v, fam.vcc_max_v
            ));
        }
        if notes.has(Notes::TEMP_OUT_OF_SPEC) && seen.insert((inst.reference.clone(), 2)) {
            in_spec = false;
            warnings.push(format!(
                "OUT OF SPEC: {} ({}) at {} °C is outside the {} rating {}…{} °C",
                inst.reference, part.type_name, c.temp_c, fam.name, fam.temp_min_c, fam.temp_max_c
            ));
        }
        if notes.has(Notes::ABOVE_LAST_COLUMN) {
            let a = &part.arcs[arc];
            let last = a.worst.last().map_or(0.0, |c| c.temp_c);
            warnings.push(format!(
                "{} {} {}: the data sheet has no column above {last} °C; that column's values are used at {} °C",
                inst.reference, part.type_name, a.name, c.temp_c
            ));
        }
        if notes.has(Notes::TYP_FROM_MAX) && seen.insert((format!("{}{}", inst.reference, arc), 3))
        {
            warnings.push(format!(
                "{} {} {}: no typical value in the data sheet; the guaranteed value is used",
                inst.reference, part.type_name, part.arcs[arc].name
            ));
        }
    }
    if op.temp_c < 25.0 {
        warnings.push(
            "below 25 °C the 25 °C columns are used (CMOS is faster when cold; the data sheets guarantee the −40…85 °C column there: use --temp 85 for a strict bound)".to_string(),
        );
    }

    let mut families: BTreeSet<usize> = BTreeSet::new();
    for inst in &design.instances {
        families.insert(lib.parts[inst.part].family);
    }
    let models = families
        .into_iter()
        .map(|fi| {
            let f = &lib.families[fi];
            match (&f.derating, &f.shape) {
                (super::library::DeratingKind::AlphaPower, Some(s)) => ModelNote {
                    family: f.name.clone(),
                    model: format!(
                        "alpha-power law t = k·V/(V − {:.2} V)^{:.2}, fitted on {} rows of {} ({} outlier rows left out)",
                        s.vt_v, s.alpha, s.rows, s.fitted_on, s.excluded
                    ),
                    fit_rms_pct: Some(s.rms_pct),
                    fit_max_pct: Some(s.max_pct),
                },
                _ => ModelNote {
                    family: f.name.clone(),
                    model: format!(
                        "not derated by supply: one data-sheet column, valid {}–{} V",
                        f.vcc_min_v, f.vcc_max_v
                    ),
                    fit_rms_pct: None,
                    fit_max_pct: None,
                },
            }
        })
        .collect();

    Budget {
        design: design.name.clone(),
        vcc_v: op.vcc_v,
        section_vcc_v: op.section_vcc_v.clone(),
        temp_c: op.temp_c,
        corner: op.corner,
        low_required_ns: l,
        high_required_ns: h,
        period_required_ns: p,
        best_duty: d_star,
        min_period_best_duty_ns: t_best,
        fmax_best_duty_hz: 1e9 / t_best,
        min_period_50_ns: t_50,
        fmax_50_hz: 1e9 / t_50,
        at_duty: duty.map(|d| {
            let t = min_period_ns(l, h, p, d);
            DutyPoint {
                duty: d,
                min_period_ns: t,
                fmax_hz: 1e9 / t,
            }
        }),
        clock: clock_slack,
        critical_paths,
        endpoints,
        holds,
        in_spec,
        warnings,
        models,
    }
}

/// One point of a supply sweep.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SweepPoint {
    /// Supply (applied to every section).
    pub vcc_v: f64,
    /// L at this supply.
    pub low_required_ns: f64,
    /// H at this supply.
    pub high_required_ns: f64,
    /// P at this supply.
    pub period_required_ns: f64,
    /// f_max at 50 % duty.
    pub fmax_50_hz: f64,
    /// d*.
    pub best_duty: f64,
    /// f_max at d*.
    pub fmax_best_duty_hz: f64,
    /// Whether every part is inside its data sheet at this supply.
    pub in_spec: bool,
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

/// Whether an arc kind is a timing check rather than a delay (for labels).
pub fn is_check(kind: ArcKind) -> bool {
    kind != ArcKind::Delay
}

#[cfg(test)]
mod tests {
    use super::*;

    // Invented worked example, ../shared/DESIGN.md §4: L = 500 ns, H = 125 ns →
    // d* = 0.20, T_min = 625 ns (1.6 MHz); at 50 % duty T_min = 1000 ns (1.0 MHz).
    #[test]
    fn clock_plan_of_the_worked_example() {
        let (l, h, p) = (500.0, 125.0, 0.0);
        let d = best_duty(l, h);
        assert!((d - 0.20).abs() < 1e-12);
        assert!((min_period_ns(l, h, p, d) - 625.0).abs() < 1e-9);
        assert!((min_period_ns(l, h, p, 0.5) - 1000.0).abs() < 1e-9);
        // at d* both phase limits bind at once
        assert!((l / (1.0 - d) - h / d).abs() < 1e-9);
    }

    #[test]
    fn full_period_requirement_dominates_when_longer() {
        // P > L + H: T_min = P at d*, and d* is inside the feasible duty range [H/P, 1 − L/P]
        let (l, h, p) = (100.0, 50.0, 400.0);
        let d = best_duty(l, h);
        assert_eq!(min_period_ns(l, h, p, d), 400.0);
        assert!(d >= h / p && d <= 1.0 - l / p);
    }

    #[test]
    fn slack_is_phase_minus_requirement() {
        let s = clock_slack(
            500.0,
            125.0,
            0.0,
            ClockInput {
                freq_hz: 1.0e6,
                duty: 0.5,
            },
        );
        assert!((s.low_slack_ns - 0.0).abs() < 1e-9);
        assert!((s.high_slack_ns - 375.0).abs() < 1e-9);
        assert!((s.high_slack_pct.unwrap() - 300.0).abs() < 1e-9);
        assert_eq!(s.period_slack_pct, None);
        assert!(s.meets);
        let fast = clock_slack(
            500.0,
            125.0,
            0.0,
            ClockInput {
                freq_hz: 1.1e6,
                duty: 0.5,
            },
        );
        assert!(!fast.meets);
    }
}

//! The design file (TOML): part instances, the signal graph, launches, captures, operating point.
//!
//! Loading checks everything against the part library and reports the first problem with
//! file:line:column and a hint. The result is a resolved graph in topological order, ready to
//! solve at any operating point without re-reading the file.

use std::collections::HashMap;

use serde::Deserialize;
use toml::Spanned;

use super::derate::Corner;
use super::library::{ArcKind, Library};
use crate::diag::{Source, SourceError};
use crate::units;

/// The demo design (the invented Larkspur-8 machine), embedded so every command has a default.
pub const DEMO_DESIGN: &str = include_str!("../../../../designs/larkspur-8.toml");
/// Display name of the embedded demo design.
pub const DEMO_NAME: &str = "designs/larkspur-8.toml";

/// A clock edge of the master clock.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Deserialize, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Edge {
    /// Low-to-high.
    Rise,
    /// High-to-low.
    Fall,
}

impl Edge {
    /// Arrow used in printed paths.
    pub fn arrow(self) -> &'static str {
        match self {
            Edge::Rise => "↑",
            Edge::Fall => "↓",
        }
    }
}

/// Where a delay comes from.
#[derive(Clone, Debug, PartialEq)]
pub enum Delay {
    /// A library arc of a part instance, optionally scaled by an override.
    Part {
        /// Index into [`Design::instances`].
        instance: usize,
        /// Arc index inside the library part.
        arc: usize,
        /// Multiplier from an override (1.0 normally).
        scale: f64,
    },
    /// A fixed delay (wiring, RC, or an override), not derated.
    Fixed {
        /// Minimum, if known.
        min_ns: Option<f64>,
        /// Typical, if known.
        typ_ns: Option<f64>,
        /// Maximum.
        max_ns: f64,
        /// What it is, for printed paths.
        label: String,
    },
}

/// A part instance on the machine.
#[derive(Clone, Debug)]
pub struct Instance {
    /// Reference designator, e.g. "U12".
    pub reference: String,
    /// Index into [`Library::parts`].
    pub part: usize,
    /// Index into [`Design::sections`].
    pub section: Option<usize>,
    /// Load on its outputs, when not the data sheet's.
    pub load_pf: Option<f64>,
}

/// A board section fed from its own stretch of supply wiring.
#[derive(Clone, Debug)]
pub struct Section {
    /// Name.
    pub name: String,
    /// Label of the probe's analog channel that measures this section's rail.
    pub rail: Option<String>,
}

/// A clock edge starting data on a signal through a part's clock-to-output arc.
#[derive(Clone, Debug)]
pub struct Launch {
    /// Name shown in paths.
    pub name: String,
    /// Master-clock edge.
    pub edge: Edge,
    /// Clock buffers/inverters between the master clock and the part.
    pub clock_via: Vec<Delay>,
    /// The clock-to-output arc.
    pub delay: Delay,
    /// Signal driven.
    pub to: usize,
}

/// A delay element from one signal to another.
#[derive(Clone, Debug)]
pub struct GraphArc {
    /// Input signal.
    pub from: usize,
    /// Output signal.
    pub to: usize,
    /// Its delay.
    pub delay: Delay,
}

/// A capture point: a register or memory input with setup/hold, clocked by a master edge.
#[derive(Clone, Debug)]
pub struct Capture {
    /// Name shown in reports.
    pub name: String,
    /// Signal captured.
    pub signal: usize,
    /// Master-clock edge that captures.
    pub edge: Edge,
    /// Clock buffers/inverters on the capture clock.
    pub clock_via: Vec<Delay>,
    /// Setup requirement.
    pub setup: Option<Delay>,
    /// Hold requirement.
    pub hold: Option<Delay>,
}

/// The operating point written in the design (command-line flags may override it).
#[derive(Clone, Debug)]
pub struct Operating {
    /// Supply voltage.
    pub vcc_v: f64,
    /// Ambient temperature.
    pub temp_c: f64,
    /// Corner for late (setup) analysis.
    pub corner: Corner,
}

/// The clock the builder plans to run, if the design names one.
#[derive(Clone, Debug, Default)]
pub struct ClockPlan {
    /// Frequency.
    pub freq_hz: Option<f64>,
    /// High-time fraction.
    pub duty: Option<f64>,
}

/// A resolved design, ready to solve.
#[derive(Clone, Debug)]
pub struct Design {
    /// Machine name.
    pub name: String,
    /// The file it came from (kept for diagnostics and for embedding in recordings).
    pub source: Source,
    /// Operating point from the file.
    pub operating: Operating,
    /// Planned clock from the file.
    pub clock: ClockPlan,
    /// Name of the master clock.
    pub clock_name: String,
    /// Board sections.
    pub sections: Vec<Section>,
    /// Part instances.
    pub instances: Vec<Instance>,
    /// Signal names.
    pub signals: Vec<String>,
    /// Launch points.
    pub launches: Vec<Launch>,
    /// Delay arcs.
    pub arcs: Vec<GraphArc>,
    /// Capture points.
    pub captures: Vec<Capture>,
    /// Signals in topological order.
    pub order: Vec<usize>,
    /// For each signal, the arcs leaving it (indices into `arcs`).
    pub fanout: Vec<Vec<usize>>,
    /// Problems that do not stop the analysis (e.g. unreachable captures).
    pub warnings: Vec<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawDesign {
    design: RawMeta,
    operating: Option<RawOperating>,
    clock: Option<RawClock>,
    #[serde(default)]
    section: Vec<RawSection>,
    #[serde(default)]
    part: Vec<RawPart>,
    #[serde(default)]
    launch: Vec<RawLaunch>,
    #[serde(default)]
    arc: Vec<RawArc>,
    #[serde(default)]
    capture: Vec<RawCapture>,
    #[serde(default, rename = "override")]
    overrides: Vec<RawOverride>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawMeta {
    name: String,
    #[allow(dead_code)]
    notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOperating {
    vcc: Option<Spanned<String>>,
    temp: Option<Spanned<toml::Value>>,
    corner: Option<Corner>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawClock {
    name: Option<String>,
    freq: Option<Spanned<String>>,
    duty: Option<Spanned<toml::Value>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSection {
    name: Spanned<String>,
    rail: Option<String>,
    #[allow(dead_code)]
    notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPart {
    #[serde(rename = "ref")]
    reference: Spanned<String>,
    #[serde(rename = "type")]
    type_name: Spanned<String>,
    section: Option<Spanned<String>>,
    load: Option<Spanned<String>>,
    #[allow(dead_code)]
    notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawVia {
    part: Spanned<String>,
    arc: Spanned<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLaunch {
    name: Option<String>,
    edge: Edge,
    part: Spanned<String>,
    arc: Spanned<String>,
    to: Spanned<String>,
    #[serde(default)]
    clock_via: Vec<RawVia>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFixed {
    min: Option<Spanned<String>>,
    typ: Option<Spanned<String>>,
    max: Spanned<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawArc {
    from: Spanned<String>,
    to: Spanned<String>,
    part: Option<Spanned<String>>,
    arc: Option<Spanned<String>>,
    delay: Option<Spanned<RawFixed>>,
    name: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawCapture {
    name: Option<String>,
    signal: Spanned<String>,
    edge: Edge,
    part: Option<Spanned<String>>,
    check: Option<Spanned<String>>,
    setup: Option<Spanned<String>>,
    hold: Option<Spanned<String>>,
    #[serde(default)]
    clock_via: Vec<RawVia>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawOverride {
    part: Spanned<String>,
    arc: Spanned<String>,
    kind: Option<ArcKind>,
    min: Option<Spanned<String>>,
    typ: Option<Spanned<String>>,
    max: Option<Spanned<String>>,
    scale: Option<Spanned<f64>>,
}

struct Loader<'a> {
    src: &'a Source,
    lib: &'a Library,
    instances: Vec<Instance>,
    by_ref: HashMap<String, usize>,
    signals: Vec<String>,
    by_signal: HashMap<String, usize>,
}

type Res<T> = Result<T, Box<SourceError>>;

impl Loader<'_> {
    fn err(
        &self,
        span: std::ops::Range<usize>,
        msg: String,
        label: &str,
        help: Option<String>,
    ) -> Box<SourceError> {
        Box::new(self.src.error(span, msg, label, help))
    }

    fn time(&self, s: &Spanned<String>) -> Res<f64> {
        let v = units::parse_time_ns(s.get_ref()).map_err(|e| {
            self.err(
                s.span(),
                e.to_string(),
                "not a time",
                Some(units::HELP.into()),
            )
        })?;
        if v < 0.0 {
            return Err(self.err(
                s.span(),
                format!("time \"{}\" is negative", s.get_ref()),
                "here",
                Some("delays and setup/hold times are ≥ 0".into()),
            ));
        }
        Ok(v)
    }

    fn instance(&self, name: &Spanned<String>) -> Res<usize> {
        self.by_ref.get(name.get_ref()).copied().ok_or_else(|| {
            let mut known: Vec<&str> = self.by_ref.keys().map(String::as_str).collect();
            known.sort_unstable();
            known.truncate(12);
            self.err(
                name.span(),
                format!("no part instance \"{}\" in this design", name.get_ref()),
                "unknown reference",
                Some(format!(
                    "declare it with [[part]] ref = \"{}\" type = \"…\"; instances here: {}",
                    name.get_ref(),
                    known.join(", ")
                )),
            )
        })
    }

    fn part_arc(&self, inst: usize, arc: &Spanned<String>, kind: ArcKind) -> Res<usize> {
        let part = &self.lib.parts[self.instances[inst].part];
        if let Some(i) = part.arc(arc.get_ref(), kind) {
            return Ok(i);
        }
        let other = [ArcKind::Delay, ArcKind::Setup, ArcKind::Hold]
            .into_iter()
            .find(|k| *k != kind && part.arc(arc.get_ref(), *k).is_some());
        let msg = match other {
            Some(k) => format!(
                "arc \"{}\" of {} is a {k:?} arc, not a {kind:?} arc",
                arc.get_ref(),
                part.type_name
            ),
            None => format!("part {} has no arc \"{}\"", part.type_name, arc.get_ref()),
        };
        let names = part.arc_names(kind);
        Err(self.err(
            arc.span(),
            msg,
            "unknown arc",
            Some(format!(
                "{kind:?} arcs of {}: {}",
                part.type_name,
                if names.is_empty() {
                    "none".to_string()
                } else {
                    names.join(", ")
                }
            )),
        ))
    }

    fn via(&self, list: &[RawVia]) -> Res<Vec<Delay>> {
        list.iter()
            .map(|v| {
                let instance = self.instance(&v.part)?;
                let arc = self.part_arc(instance, &v.arc, ArcKind::Delay)?;
                Ok(Delay::Part {
                    instance,
                    arc,
                    scale: 1.0,
                })
            })
            .collect()
    }

    fn signal(&mut self, name: &Spanned<String>) -> Res<usize> {
        let n = name.get_ref().trim();
        if n.is_empty() {
            return Err(self.err(name.span(), "empty signal name".into(), "here", None));
        }
        if let Some(&i) = self.by_signal.get(n) {
            return Ok(i);
        }
        self.signals.push(n.to_string());
        self.by_signal.insert(n.to_string(), self.signals.len() - 1);
        Ok(self.signals.len() - 1)
    }

    fn fixed(&self, f: &Spanned<RawFixed>, label: String) -> Res<Delay> {
        let raw = f.get_ref();
        let max = self.time(&raw.max)?;
        let min = raw.min.as_ref().map(|m| self.time(m)).transpose()?;
        let typ = raw.typ.as_ref().map(|t| self.time(t)).transpose()?;
        let ordered = min.is_none_or(|m| m <= typ.unwrap_or(max)) && typ.is_none_or(|t| t <= max);
        if !ordered {
            return Err(self.err(
                f.span(),
                "fixed delay must satisfy min ≤ typ ≤ max".into(),
                "out of order",
                Some("swap the values or drop the one you do not know".into()),
            ));
        }
        Ok(Delay::Fixed {
            min_ns: min,
            typ_ns: typ,
            max_ns: max,
            label,
        })
    }
}

fn temp_value(src: &Source, v: &Spanned<toml::Value>) -> Res<f64> {
    match v.get_ref() {
        toml::Value::Integer(i) => Ok(*i as f64),
        toml::Value::Float(f) if f.is_finite() => Ok(*f),
        toml::Value::String(s) => units::parse_temp_c(s).map_err(|e| {
            Box::new(src.error(
                v.span(),
                e.to_string(),
                "not a temperature",
                Some(units::HELP.into()),
            ))
        }),
        _ => Err(Box::new(src.error(
            v.span(),
            "temperature must be a number of °C or a string like \"85 °C\"",
            "here",
            None,
        ))),
    }
}

fn duty_value(src: &Source, v: &Spanned<toml::Value>) -> Res<f64> {
    let text = match v.get_ref() {
        toml::Value::Float(f) => f.to_string(),
        toml::Value::Integer(i) => i.to_string(),
        toml::Value::String(s) => s.clone(),
        _ => String::new(),
    };
    units::parse_duty(&text).map_err(|e| {
        Box::new(src.error(
            v.span(),
            e.to_string(),
            "not a duty cycle",
            Some(units::HELP.into()),
        ))
    })
}

impl Design {
    /// The embedded demo design.
    pub fn demo(lib: &Library) -> Design {
        Design::parse(Source::new(DEMO_NAME, DEMO_DESIGN), lib)
            .expect("demo design is valid (tested)")
    }

    /// Read and resolve a design file from disk.
    pub fn load(path: &std::path::Path, lib: &Library) -> Result<Design, DesignError> {
        let text = std::fs::read_to_string(path).map_err(|e| DesignError::Io {
            path: path.display().to_string(),
            err: e,
        })?;
        Design::parse(Source::new(path.display().to_string(), text), lib)
            .map_err(DesignError::Source)
    }

    /// Parse and resolve design text.
    pub fn parse(src: Source, lib: &Library) -> Res<Design> {
        let raw: RawDesign = toml::from_str(&src.text).map_err(|e| Box::new(src.toml_error(&e)))?;
        let mut ld = Loader {
            src: &src,
            lib,
            instances: Vec::new(),
            by_ref: HashMap::new(),
            signals: Vec::new(),
            by_signal: HashMap::new(),
        };

        let operating = {
            let o = raw.operating.as_ref();
            let vcc_v = match o.and_then(|o| o.vcc.as_ref()) {
                Some(s) => units::parse_voltage_v(s.get_ref())
                    .map_err(|e| {
                        ld.err(
                            s.span(),
                            e.to_string(),
                            "not a voltage",
                            Some(units::HELP.into()),
                        )
                    })
                    .and_then(|v| {
                        if v > 0.0 {
                            Ok(v)
                        } else {
                            Err(ld.err(
                                s.span(),
                                "supply voltage must be positive".into(),
                                "here",
                                None,
                            ))
                        }
                    })?,
                None => 5.0,
            };
            let temp_c = match o.and_then(|o| o.temp.as_ref()) {
                Some(t) => temp_value(&src, t)?,
                None => 25.0,
            };
            Operating {
                vcc_v,
                temp_c,
                corner: o.and_then(|o| o.corner).unwrap_or(Corner::Max),
            }
        };
        let mut clock = ClockPlan::default();
        let mut clock_name = "CLK".to_string();
        if let Some(c) = &raw.clock {
            if let Some(n) = &c.name {
                clock_name = n.clone();
            }
            if let Some(f) = &c.freq {
                let hz = units::parse_freq_hz(f.get_ref()).map_err(|e| {
                    ld.err(
                        f.span(),
                        e.to_string(),
                        "not a frequency",
                        Some(units::HELP.into()),
                    )
                })?;
                if hz <= 0.0 {
                    return Err(ld.err(
                        f.span(),
                        "clock frequency must be positive".into(),
                        "here",
                        None,
                    ));
                }
                clock.freq_hz = Some(hz);
            }
            if let Some(d) = &c.duty {
                clock.duty = Some(duty_value(&src, d)?);
            }
        }

        let mut sections: Vec<Section> = Vec::new();
        for s in &raw.section {
            if sections.iter().any(|x| x.name == *s.name.get_ref()) {
                return Err(ld.err(
                    s.name.span(),
                    format!("section \"{}\" is declared twice", s.name.get_ref()),
                    "second declaration",
                    Some("give each [[section]] a unique name".into()),
                ));
            }
            sections.push(Section {
                name: s.name.get_ref().clone(),
                rail: s.rail.clone(),
            });
        }

        for p in &raw.part {
            let reference = p.reference.get_ref().trim().to_string();
            if reference.is_empty() {
                return Err(ld.err(
                    p.reference.span(),
                    "empty part reference".into(),
                    "here",
                    Some("use a designator such as \"U12\"".into()),
                ));
            }
            if ld.by_ref.contains_key(&reference) {
                return Err(ld.err(
                    p.reference.span(),
                    format!("part reference \"{reference}\" is used twice"),
                    "duplicate",
                    Some("each [[part]] needs its own reference designator".into()),
                ));
            }
            let part = lib.part_index(p.type_name.get_ref()).ok_or_else(|| {
                let similar = lib.similar_parts(p.type_name.get_ref());
                ld.err(
                    p.type_name.span(),
                    format!("unknown part type \"{}\"", p.type_name.get_ref()),
                    "not in the part library",
                    Some(if similar.is_empty() {
                        "list the library with `slackmeter parts`, or add the part in a --parts folder".into()
                    } else {
                        format!("similar parts in the library: {}", similar.join(", "))
                    }),
                )
            })?;
            let section =
                match &p.section {
                    Some(s) => Some(
                        sections
                            .iter()
                            .position(|x| x.name == *s.get_ref())
                            .ok_or_else(|| {
                                ld.err(
                        s.span(),
                        format!("no section \"{}\" in this design", s.get_ref()),
                        "unknown section",
                        Some(format!(
                            "declare it with [[section]] name = \"{}\"; sections here: {}",
                            s.get_ref(),
                            sections.iter().map(|x| x.name.as_str()).collect::<Vec<_>>().join(", ")
                        )),
                    )
                            })?,
                    ),
                    None => None,
                };
            let load_pf = match &p.load {
                Some(l) => {
                    let v = units::parse_capacitance_pf(l.get_ref()).map_err(|e| {
                        ld.err(
                            l.span(),
                            e.to_string(),
                            "not a capacitance",
                            Some(units::HELP.into()),
                        )
                    })?;
                    if v < 0.0 {
                        return Err(ld.err(
                            l.span(),
                            "load must not be negative".into(),
                            "here",
                            None,
                        ));
                    }
                    Some(v)
                }
                None => None,
            };
            ld.by_ref.insert(reference.clone(), ld.instances.len());
            ld.instances.push(Instance {
                reference,
                part,
                section,
                load_pf,
            });
        }

        let mut launches = Vec::new();
        for l in &raw.launch {
            let instance = ld.instance(&l.part)?;
            let arc = ld.part_arc(instance, &l.arc, ArcKind::Delay)?;
            let to = ld.signal(&l.to)?;
            launches.push(Launch {
                name: l
                    .name
                    .clone()
                    .unwrap_or_else(|| format!("{} {}", l.part.get_ref(), l.arc.get_ref())),
                edge: l.edge,
                clock_via: ld.via(&l.clock_via)?,
                delay: Delay::Part {
                    instance,
                    arc,
                    scale: 1.0,
                },
                to,
            });
        }

        let mut arcs = Vec::new();
        let mut arc_spans = Vec::new();
        for a in &raw.arc {
            let from = ld.signal(&a.from)?;
            let to = ld.signal(&a.to)?;
            let delay = match (&a.part, &a.arc, &a.delay) {
                (Some(p), Some(arc), None) => {
                    let instance = ld.instance(p)?;
                    let arc = ld.part_arc(instance, arc, ArcKind::Delay)?;
                    Delay::Part {
                        instance,
                        arc,
                        scale: 1.0,
                    }
                }
                (None, None, Some(f)) => {
                    ld.fixed(f, a.name.clone().unwrap_or_else(|| "fixed delay".into()))?
                }
                (Some(p), None, None) => {
                    return Err(ld.err(
                        p.span(),
                        "arc names a part but not which of its arcs".into(),
                        "part without arc",
                        Some("add arc = \"A->Y\" (the part's timing arc)".into()),
                    ));
                }
                (None, Some(arc), None) => {
                    return Err(ld.err(
                        arc.span(),
                        "arc names a timing arc but not the part".into(),
                        "arc without part",
                        Some("add part = \"U…\"".into()),
                    ));
                }
                (_, _, Some(f)) if a.part.is_some() || a.arc.is_some() => {
                    return Err(ld.err(
                        f.span(),
                        "an arc takes either part + arc or a fixed delay, not both".into(),
                        "both given",
                        Some("remove the delay table or the part/arc keys".into()),
                    ));
                }
                _ => {
                    return Err(ld.err(
                        a.from.span(),
                        format!(
                            "arc {} -> {} has no delay",
                            a.from.get_ref(),
                            a.to.get_ref()
                        ),
                        "no delay",
                        Some(
                            "give part = \"U…\" and arc = \"A->Y\", or delay = { max = \"5 ns\" }"
                                .into(),
                        ),
                    ));
                }
            };
            arcs.push(GraphArc { from, to, delay });
            arc_spans.push(a.from.span().start..a.to.span().end);
        }

        let mut captures = Vec::new();
        for c in &raw.capture {
            let signal = match ld.by_signal.get(c.signal.get_ref().trim()) {
                Some(&s) => s,
                None => {
                    return Err(ld.err(
                        c.signal.span(),
                        format!(
                            "signal \"{}\" is not driven by any launch or arc",
                            c.signal.get_ref()
                        ),
                        "unknown signal",
                        Some(
                            "check the spelling, or add the [[arc]] or [[launch]] that drives it"
                                .into(),
                        ),
                    ));
                }
            };
            let (setup, hold) = match (&c.part, &c.check) {
                (Some(p), Some(check)) => {
                    if c.setup.is_some() || c.hold.is_some() {
                        return Err(ld.err(check.span(), "a capture takes either part + check or fixed setup/hold times, not both".into(), "both given", None));
                    }
                    let instance = ld.instance(p)?;
                    let s = ld.part_arc(instance, check, ArcKind::Setup)?;
                    let part = &lib.parts[ld.instances[instance].part];
                    let h = part.arc(check.get_ref(), ArcKind::Hold);
                    (
                        Some(Delay::Part {
                            instance,
                            arc: s,
                            scale: 1.0,
                        }),
                        h.map(|arc| Delay::Part {
                            instance,
                            arc,
                            scale: 1.0,
                        }),
                    )
                }
                (None, None) => {
                    let who = c.name.clone().unwrap_or_else(|| c.signal.get_ref().clone());
                    let fixed = |v: &Option<Spanned<String>>, what: &str| -> Res<Option<Delay>> {
                        v.as_ref()
                            .map(|s| {
                                ld.time(s).map(|ns| Delay::Fixed {
                                    min_ns: Some(ns),
                                    typ_ns: Some(ns),
                                    max_ns: ns,
                                    label: format!("fixed {what} of {who}"),
                                })
                            })
                            .transpose()
                    };
                    let setup = fixed(&c.setup, "setup")?;
                    if setup.is_none() {
                        return Err(ld.err(
                            c.signal.span(),
                            "capture has no setup requirement".into(),
                            "this capture",
                            Some(
                                "give part = \"U…\" and check = \"D->CLK\", or setup = \"10 ns\""
                                    .into(),
                            ),
                        ));
                    }
                    (setup, fixed(&c.hold, "hold")?)
                }
                (Some(p), None) => {
                    return Err(ld.err(
                        p.span(),
                        "capture names a part but not its check".into(),
                        "part without check",
                        Some(
                            "add check = \"D->CLK\" (the name of the part's setup/hold arcs)"
                                .into(),
                        ),
                    ));
                }
                (None, Some(ch)) => {
                    return Err(ld.err(
                        ch.span(),
                        "capture names a check but not the part".into(),
                        "check without part",
                        Some("add part = \"U…\"".into()),
                    ));
                }
            };
            captures.push(Capture {
                name: c.name.clone().unwrap_or_else(|| {
                    format!(
                        "{} at {}",
                        c.signal.get_ref(),
                        c.part.as_ref().map_or("capture", |p| p.get_ref().as_str())
                    )
                }),
                signal,
                edge: c.edge,
                clock_via: ld.via(&c.clock_via)?,
                setup,
                hold,
            });
        }

        // local overrides of library values
        for o in &raw.overrides {
            let instance = ld.instance(&o.part)?;
            let kind = o.kind.unwrap_or(ArcKind::Delay);
            let arc = ld.part_arc(instance, &o.arc, kind)?;
            let replacement = match (&o.max, &o.scale) {
                (Some(max), None) => {
                    let max_ns = ld.time(max)?;
                    let min_ns = o.min.as_ref().map(|m| ld.time(m)).transpose()?;
                    let typ_ns = o.typ.as_ref().map(|t| ld.time(t)).transpose()?;
                    Delay::Fixed {
                        min_ns,
                        typ_ns,
                        max_ns,
                        label: format!("override of {} {}", o.part.get_ref(), o.arc.get_ref()),
                    }
                }
                (None, Some(scale)) => {
                    let s = *scale.get_ref();
                    if !(s.is_finite() && s > 0.0) {
                        return Err(ld.err(
                            scale.span(),
                            "scale must be a positive number".into(),
                            "here",
                            None,
                        ));
                    }
                    Delay::Part {
                        instance,
                        arc,
                        scale: s,
                    }
                }
                (Some(max), Some(_)) => {
                    return Err(ld.err(
                        max.span(),
                        "an override takes either fixed values (min/typ/max) or a scale, not both"
                            .into(),
                        "both given",
                        None,
                    ));
                }
                (None, None) => {
                    return Err(ld.err(
                        o.part.span(),
                        "override changes nothing".into(),
                        "this override",
                        Some("add max = \"12 ns\" (with optional min/typ) or scale = 1.2".into()),
                    ));
                }
            };
            let target = |d: &Delay| matches!(d, Delay::Part { instance: i, arc: a, .. } if *i == instance && *a == arc);
            let mut replace = |d: &mut Delay| {
                if target(d) {
                    *d = replacement.clone();
                }
            };
            for l in &mut launches {
                replace(&mut l.delay);
                l.clock_via.iter_mut().for_each(&mut replace);
            }
            for a in &mut arcs {
                replace(&mut a.delay);
            }
            for c in &mut captures {
                c.clock_via.iter_mut().for_each(&mut replace);
                if let Some(s) = &mut c.setup {
                    replace(s);
                }
                if let Some(h) = &mut c.hold {
                    replace(h);
                }
            }
        }

        if launches.is_empty() || captures.is_empty() {
            return Err(ld.err(
                0..0,
                "the design has nothing to time: it needs at least one [[launch]] and one [[capture]]".into(),
                "here",
                Some("see the design file format in docs/DESIGN-FILE.md".into()),
            ));
        }

        let n = ld.signals.len();
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
            let cycle = find_cycle(&arcs, &indeg);
            let names: Vec<&str> = cycle
                .iter()
                .map(|&ai| ld.signals[arcs[ai].from].as_str())
                .collect();
            let first = cycle[0];
            return Err(ld.err(
                arc_spans[first].clone(),
                format!(
                    "combinational loop: {} -> {}",
                    names.join(" -> "),
                    names[0]
                ),
                "this arc closes the loop",
                Some("a path must pass through a register (a [[launch]]) to feed back; remove or break the arc".into()),
            ));
        }

        let mut design = Design {
            name: raw.design.name,
            source: src.clone(),
            operating,
            clock,
            clock_name,
            sections,
            instances: ld.instances,
            signals: ld.signals,
            launches,
            arcs,
            captures,
            order,
            fanout,
            warnings: Vec::new(),
        };
        design.warnings = design.reachability_warnings();
        if design.warnings.len() == design.captures.len() {
            return Err(Box::new(
                src.error(
                    raw.capture[0].signal.span(),
                    "no capture is reached by any launch: nothing to time",
                    "here",
                    Some(
                        "connect the launch signals to the captured signals with [[arc]] entries"
                            .into(),
                    ),
                ),
            ));
        }
        Ok(design)
    }

    fn reachability_warnings(&self) -> Vec<String> {
        let mut reached = vec![false; self.signals.len()];
        for l in &self.launches {
            reached[l.to] = true;
        }
        for &s in &self.order {
            if reached[s] {
                for &ai in &self.fanout[s] {
                    reached[self.arcs[ai].to] = true;
                }
            }
        }
        self.captures
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

    /// Label of a delay for printed paths, e.g. "U5 74HC04 A->Y".
    pub fn delay_label(&self, lib: &Library, d: &Delay) -> String {
        match d {
            Delay::Part {
                instance,
                arc,
                scale,
            } => {
                let inst = &self.instances[*instance];
                let part = &lib.parts[inst.part];
                let s = if (*scale - 1.0).abs() > 1e-12 {
                    format!(" ×{scale}")
                } else {
                    String::new()
                };
                format!(
                    "{} {} {}{s}",
                    inst.reference, part.type_name, part.arcs[*arc].name
                )
            }
            Delay::Fixed { label, .. } => label.clone(),
        }
    }
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

/// Failure to load a design from disk.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum DesignError {
    /// The file could not be read.
    #[error("cannot read design file {path}: {err}")]
    #[diagnostic(
        code(slackmeter::io),
        help("check the path; without one the built-in demo design is used")
    )]
    Io {
        /// Path given.
        path: String,
        /// OS error.
        err: std::io::Error,
    },
    /// The file has an error at a location.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Source(Box<SourceError>),
}

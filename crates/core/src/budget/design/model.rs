//! The resolved design: part instances, sections, and the signal graph of launches, delay arcs
//! and captures, with every name already looked up.

use serde::{Deserialize, Serialize};

use crate::budget::derate::Corner;
use crate::budget::library::model::Library;
use crate::diag::Source;

/// A clock edge of the master clock.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash, Deserialize, Serialize)]
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
        /// A guaranteed minimum given by an override, in place of the data sheet's (which
        /// rarely has one); the maximum stays the derated library value.
        min_ns: Option<f64>,
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
    /// Credit the clock path shared by a launch and its capture (same edge type only).
    pub common_clock_credit: bool,
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
    /// Part instances clocked by the master clock (a launch's or a capture's part), once each:
    /// their pulse widths and f_max limit the clock.
    pub clocked: Vec<Clocked>,
}

/// A part instance clocked by the master clock, and how.
#[derive(Clone, Debug, PartialEq)]
pub struct Clocked {
    /// Index into [`Design::instances`].
    pub instance: usize,
    /// The master edge that clocks it.
    pub edge: Edge,
    /// The part's pin the clock enters by ("CLK", "WE", "LE"): its pulse-width and f_max arcs
    /// carry this name.
    pub pin: String,
}

impl Design {
    /// Label of a delay for printed paths, e.g. "U5 74HC04 A->Y".
    pub fn delay_label(&self, lib: &Library, d: &Delay) -> String {
        match d {
            Delay::Part {
                instance,
                arc,
                scale,
                min_ns,
            } => {
                let inst = &self.instances[*instance];
                let part = &lib.parts[inst.part];
                let mut s = if (*scale - 1.0).abs() > 1e-12 {
                    format!(" ×{scale}")
                } else {
                    String::new()
                };
                if let Some(m) = min_ns {
                    s += &format!(" (min {m} ns by override)");
                }
                format!(
                    "{} {} {}{s}",
                    inst.reference, part.type_name, part.arcs[*arc].name
                )
            }
            Delay::Fixed { label, .. } => label.clone(),
        }
    }
}

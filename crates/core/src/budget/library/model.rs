//! The part library's model: logic families, parts, their timing arcs and data-sheet rows.
//!
//! Plain data plus look-ups; the loader (`library.rs`) fills it and fits each family's voltage
//! shape, and `derate` evaluates it.

use std::collections::HashMap;

use serde::{Deserialize, Serialize};

/// How sure we are of a value.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    /// Read in the named data sheet (listed in the project's reference table).
    Seen,
    /// Not checked against the data sheet yet.
    FromMemory,
}

/// What a timing arc means.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ArcKind {
    /// Propagation delay from an input (or clock) to an output.
    Delay,
    /// Setup time an input needs before the capturing edge.
    Setup,
    /// Hold time an input needs after the capturing edge.
    Hold,
}

/// How a family's delays change with supply voltage.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum DeratingKind {
    /// Alpha-power law fitted over the family's voltage columns.
    AlphaPower,
    /// One supply column only: held constant inside the range.
    None,
}

/// Fitted voltage shape of a family: g(V) = V / (V − Vt)^α, times a constant k per row.
#[derive(Clone, Debug, Serialize)]
pub struct Shape {
    /// Velocity-saturation exponent α.
    pub alpha: f64,
    /// Threshold voltage Vt in V.
    pub vt_v: f64,
    /// RMS relative error of the fit over all rows, in %.
    pub rms_pct: f64,
    /// Largest relative error of the fit at any column, in %.
    pub max_pct: f64,
    /// Rows (data-sheet table lines) the fit used.
    pub rows: usize,
    /// Points the fit used.
    pub points: usize,
    /// Rows left out as outliers (more than 3× the RMS error).
    pub excluded: usize,
    /// The family whose rows were fitted.
    pub fitted_on: String,
}

impl Shape {
    /// ln g(V): the alpha-power shape at a supply (V − Vt floored at 0.05 V).
    pub(crate) fn ln_g(&self, vcc_v: f64) -> f64 {
        vcc_v.ln() - self.alpha * (vcc_v - self.vt_v).max(0.05).ln()
    }
}

/// A logic family's operating range and derating model.
#[derive(Clone, Debug)]
pub struct Family {
    /// Name, e.g. "74HC".
    pub name: String,
    /// Lowest specified supply.
    pub vcc_min_v: f64,
    /// Highest specified supply.
    pub vcc_max_v: f64,
    /// Nominal supply.
    pub vcc_nominal_v: f64,
    /// Default lower limit for a rail feeding this family.
    pub rail_limit_v: f64,
    /// Lowest rated ambient temperature.
    pub temp_min_c: f64,
    /// Highest rated ambient temperature.
    pub temp_max_c: f64,
    /// Voltage derating model.
    pub derating: DeratingKind,
    /// Family whose fitted shape this one uses (itself when `None`).
    pub shape_from: Option<String>,
    /// Extra delay per pF of load beyond the data-sheet load, at 4.5 V.
    pub load_ns_per_pf: f64,
    /// Where the range comes from.
    pub source: String,
    /// Fitted voltage shape (filled after loading).
    pub shape: Option<Shape>,
}

/// One data-sheet table row: delays in ns at the listed supply columns.
#[derive(Clone, Debug)]
pub struct Series {
    /// Supply columns in V, ascending.
    pub vcc_v: Vec<f64>,
    /// Value at each column in ns.
    pub ns: Vec<f64>,
    /// Load the data sheet used for these values.
    pub load_pf: f64,
    /// ln k of the fitted model for this row (0 when the family is not derated).
    pub ln_k: f64,
    /// ln(value / model) at each column: the model's error there.
    pub resid: Vec<f64>,
}

impl Series {
    /// Whether the row follows the voltage model (see [`follows_model`]).
    pub(crate) fn follows_model(&self) -> bool {
        follows_model(&self.ns)
    }
}

/// Whether a row's values follow the voltage model: all positive and not all equal (flat rows,
/// such as a hold limit of 5 ns at every supply, are interpolated as given).
pub(crate) fn follows_model(ns: &[f64]) -> bool {
    ns.iter().all(|v| *v > 0.0) && ns.iter().any(|v| *v != ns[0])
}

/// A temperature column: the row guaranteed up to `temp_c`.
#[derive(Clone, Debug)]
pub struct Column {
    /// Upper temperature of the data sheet's column (25, 85, 125 …).
    pub temp_c: f64,
    /// Its values.
    pub series: Series,
}

/// A timing arc of a part (delay, setup or hold) with its data-sheet rows.
#[derive(Clone, Debug)]
pub struct TimingArc {
    /// Arc name, e.g. "CLK->Q".
    pub name: String,
    /// Meaning.
    pub kind: ArcKind,
    /// Source of the values.
    pub source: String,
    /// Seen or from memory.
    pub status: Status,
    /// Guaranteed values (max for delays, the limit for setup/hold) per temperature column.
    pub worst: Vec<Column>,
    /// Typical row at 25 °C, if the data sheet gives one.
    pub typ: Option<Series>,
    /// Status of the typical row.
    pub typ_status: Status,
    /// Guaranteed minimum (contamination) delays per temperature column, rarely given.
    pub min: Vec<Column>,
}

/// A part type.
#[derive(Clone, Debug)]
pub struct Part {
    /// Type name, e.g. "74HC574".
    pub type_name: String,
    /// Index into [`Library::families`].
    pub family: usize,
    /// What it is.
    pub function: String,
    /// Data sheet.
    pub source: String,
    /// Seen or from memory.
    pub status: Status,
    /// Data-sheet load for its maxima.
    pub load_pf: f64,
    /// Its arcs.
    pub arcs: Vec<TimingArc>,
    /// The file it came from.
    pub origin: String,
}

impl Part {
    /// Arcs of `kind` named `name`.
    pub fn arc(&self, name: &str, kind: ArcKind) -> Option<usize> {
        self.arcs
            .iter()
            .position(|a| a.name == name && a.kind == kind)
    }

    /// Names of arcs of one kind, for hints.
    pub fn arc_names(&self, kind: ArcKind) -> Vec<&str> {
        let mut names: Vec<&str> = self
            .arcs
            .iter()
            .filter(|a| a.kind == kind)
            .map(|a| a.name.as_str())
            .collect();
        names.dedup();
        names
    }
}

/// Families and parts, with the voltage model fitted.
#[derive(Clone, Debug, Default)]
pub struct Library {
    /// All families.
    pub families: Vec<Family>,
    /// All parts.
    pub parts: Vec<Part>,
    by_type: HashMap<String, usize>,
    /// Notes about user parts that replaced built-in ones.
    pub notes: Vec<String>,
}

impl Library {
    /// Index of a part type.
    pub fn part_index(&self, type_name: &str) -> Option<usize> {
        self.by_type.get(type_name).copied()
    }

    /// Add a part, or replace the one of the same type; returns the replaced part.
    pub(crate) fn insert_part(&mut self, part: Part) -> Option<Part> {
        match self.by_type.get(&part.type_name) {
            Some(&i) => Some(std::mem::replace(&mut self.parts[i], part)),
            None => {
                self.by_type
                    .insert(part.type_name.clone(), self.parts.len());
                self.parts.push(part);
                None
            }
        }
    }

    /// Type names close to `name` (same digits or a shared prefix), for "did you mean" hints.
    pub fn similar_parts(&self, name: &str) -> Vec<&str> {
        let digits: String = name.chars().filter(char::is_ascii_digit).collect();
        let upper = name.to_ascii_uppercase();
        let mut out: Vec<&str> = self
            .parts
            .iter()
            .map(|p| p.type_name.as_str())
            .filter(|t| {
                t.eq_ignore_ascii_case(name)
                    || (!digits.is_empty()
                        && t.chars().filter(char::is_ascii_digit).collect::<String>() == digits)
                    || (upper.len() >= 4 && t.to_ascii_uppercase().starts_with(&upper))
            })
            .collect();
        out.sort_unstable();
        out.truncate(8);
        out
    }
}

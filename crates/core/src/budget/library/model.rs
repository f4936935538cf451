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
    /// Read in a page or library that quotes the named data sheet: still to verify in the data
    /// sheet itself.
    Secondary,
    /// Not checked against the data sheet yet.
    FromMemory,
}

impl Status {
    /// The less certain of two.
    pub fn worse(self, other: Status) -> Status {
        let rank = |s: Status| match s {
            Status::Seen => 0,
            Status::Secondary => 1,
            Status::FromMemory => 2,
        };
        if rank(other) > rank(self) {
            other
        } else {
            self
        }
    }

    /// Whether the value still has to be checked against its data sheet.
    pub fn to_verify(self) -> bool {
        self != Status::Seen
    }

    /// In words.
    pub fn words(self) -> &'static str {
        match self {
            Status::Seen => "seen",
            Status::Secondary => "secondary",
            Status::FromMemory => "from memory",
        }
    }
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
    /// Minimum clock pulse width, HIGH and LOW alike ("tW clock HIGH or LOW").
    PulseWidth,
    /// Minimum clock HIGH time (at the part's pin).
    PulseHigh,
    /// Minimum clock LOW time (at the part's pin).
    PulseLow,
    /// Guaranteed maximum clock frequency, held as the shortest clock period in ns.
    Fmax,
}

impl ArcKind {
    /// Every kind, for look-ups and hints.
    pub const ALL: [ArcKind; 7] = [
        ArcKind::Delay,
        ArcKind::Setup,
        ArcKind::Hold,
        ArcKind::PulseWidth,
        ArcKind::PulseHigh,
        ArcKind::PulseLow,
        ArcKind::Fmax,
    ];

    /// The kebab-case name used in library files.
    pub fn name(self) -> &'static str {
        match self {
            ArcKind::Delay => "delay",
            ArcKind::Setup => "setup",
            ArcKind::Hold => "hold",
            ArcKind::PulseWidth => "pulse-width",
            ArcKind::PulseHigh => "pulse-high",
            ArcKind::PulseLow => "pulse-low",
            ArcKind::Fmax => "fmax",
        }
    }

    /// Whether the arc limits the clock itself (pulse widths, f_max) rather than a data path.
    pub fn is_clock_limit(self) -> bool {
        matches!(
            self,
            ArcKind::PulseWidth | ArcKind::PulseHigh | ArcKind::PulseLow | ArcKind::Fmax
        )
    }
}

/// The clock edge a part acts on (its own pin, before any inverter).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize, Default)]
#[serde(rename_all = "lowercase")]
pub enum ActiveEdge {
    /// Rising edge (registers, counters).
    #[default]
    Rise,
    /// Falling edge.
    Fall,
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

/// Errors of the model estimate found by leaving data-sheet columns out, in % of the data sheet
/// (negative: the estimate was below the published value, i.e. optimistic).
#[derive(Clone, Copy, Debug, Default, PartialEq, Serialize)]
pub struct ErrStats {
    /// Predictions compared.
    pub n: usize,
    /// RMS relative error, %.
    pub rms_pct: f64,
    /// Most negative error (the estimate most below the data sheet), %.
    pub low_pct: f64,
    /// Most positive error, %.
    pub high_pct: f64,
}

impl ErrStats {
    /// Statistics of relative errors (fractions).
    pub fn of(errors: &[f64]) -> ErrStats {
        if errors.is_empty() {
            return ErrStats::default();
        }
        let sq: f64 = errors.iter().map(|e| e * e).sum();
        ErrStats {
            n: errors.len(),
            rms_pct: (sq / errors.len() as f64).sqrt() * 100.0,
            low_pct: errors.iter().copied().fold(0.0, f64::min) * 100.0,
            high_pct: errors.iter().copied().fold(0.0, f64::max) * 100.0,
        }
    }

    /// The larger magnitude of the two extremes, %.
    pub fn worst_abs_pct(&self) -> f64 {
        self.low_pct.abs().max(self.high_pct.abs())
    }
}

/// Lowest distance above Vt at which the power law is evaluated; below it ln g continues along
/// its tangent, so delays keep rising as the supply falls.
const X_FLOOR_V: f64 = 0.1;

/// Fitted voltage shape of a family: g(V) = V / (V − Vt)^α, times a constant k per row.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Shape {
    /// Velocity-saturation exponent α (held ≥ 1, so g falls with V everywhere).
    pub alpha: f64,
    /// Threshold voltage Vt in V.
    pub vt_v: f64,
    /// RMS relative error of the fit over all rows (k free per row), in %.
    pub rms_pct: f64,
    /// Largest relative error of the fit at any column, in %.
    pub max_pct: f64,
    /// Rows (data-sheet table lines) the fit used.
    pub rows: usize,
    /// Points the fit used.
    pub points: usize,
    /// Rows the fit left out as not following the law (worst error over 3× the RMS, such as a
    /// vendor's guard-banded 3.0 V column); the error figures below still count them.
    pub excluded: usize,
    /// The family whose rows were fitted.
    pub fitted_on: String,
    /// The estimate between two columns: each supply column left out of the whole family in
    /// turn, the family refitted, and every row that had it predicting it from its neighbours.
    pub cv_between: ErrStats,
    /// The estimate above a row's highest column, found the same way.
    pub cv_above: ErrStats,
    /// The estimate below a row's lowest column, found the same way (only used where no
    /// column covers the supply, which is flagged anyway).
    pub cv_below: ErrStats,
}

impl Shape {
    /// ln g(V): the alpha-power shape at a supply; strictly falling in V for α ≥ 1 (below
    /// Vt + 0.1 V it continues along its tangent instead of turning).
    pub fn ln_g(&self, vcc_v: f64) -> f64 {
        let vf = self.vt_v + X_FLOOR_V;
        if vcc_v >= vf {
            vcc_v.ln() - self.alpha * (vcc_v - self.vt_v).ln()
        } else {
            let at = vf.ln() - self.alpha * X_FLOOR_V.ln();
            let slope = self.alpha / X_FLOOR_V - 1.0 / vf;
            at + slope * (vf - vcc_v)
        }
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
    /// Extra delay per pF of load beyond a row's own load, per supply column (from a data sheet
    /// giving the same limits at two loads); `None`: load is not modelled for this family.
    pub load: Option<Series>,
    /// Where the load slope comes from.
    pub load_source: String,
    /// Where the range comes from.
    pub source: String,
    /// Fitted voltage shape (filled after loading).
    pub shape: Option<Shape>,
}

/// Which way a row is safe: guaranteed maxima and limits grow worse upwards, guaranteed minimum
/// (contamination) delays downwards.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Bound {
    /// Larger is worse (maximum delays, setup, hold, pulse widths, f_max periods).
    Upper,
    /// Smaller is worse (minimum delays).
    Lower,
}

/// One data-sheet table row: values at the listed supply columns.
#[derive(Clone, Debug)]
pub struct Series {
    /// Supply columns in V, ascending.
    pub vcc_v: Vec<f64>,
    /// Value at each column (ns, or ns/pF for a load slope), as published.
    pub ns: Vec<f64>,
    /// Load the data sheet used for these values.
    pub load_pf: f64,
    /// Which way the row is safe.
    pub bound: Bound,
    /// The row made monotone in supply without ever passing a published value: for an upper
    /// bound the largest value at this or any higher supply, for a lower bound the smallest at
    /// this or any lower supply (equal to `ns` for every well-behaved row).
    pub env: Vec<f64>,
    /// ln g at each column when the row follows the family's shape (empty otherwise): the
    /// coordinate the estimate interpolates in.
    pub u: Vec<f64>,
}

impl Series {
    /// A row as published; `prepare` fills the envelope and the model coordinate.
    pub fn new(vcc_v: Vec<f64>, ns: Vec<f64>, load_pf: f64, bound: Bound) -> Series {
        let mut s = Series {
            env: ns.clone(),
            vcc_v,
            ns,
            load_pf,
            bound,
            u: Vec::new(),
        };
        s.prepare(None);
        s
    }

    /// Compute the envelope and, with a shape, the model coordinate of each column.
    pub fn prepare(&mut self, shape: Option<&Shape>) {
        let n = self.ns.len();
        self.env = self.ns.clone();
        match self.bound {
            Bound::Upper => {
                for i in (0..n.saturating_sub(1)).rev() {
                    self.env[i] = self.env[i].max(self.env[i + 1]);
                }
            }
            Bound::Lower => {
                for i in 1..n {
                    self.env[i] = self.env[i].min(self.env[i - 1]);
                }
            }
        }
        self.u = match shape {
            Some(s) if follows_model(&self.env) || (n == 1 && self.env[0] > 0.0) => {
                self.vcc_v.iter().map(|v| s.ln_g(*v)).collect()
            }
            _ => Vec::new(),
        };
    }
}

impl Series {
    /// The model estimate at a supply: between two columns the row is interpolated linearly in
    /// ln t against ln g(V) (so each column is met exactly and the curve has the family's
    /// shape), beyond the outermost columns it follows g(V) from the nearest one; rows without a
    /// shape (flat or zero rows, families not derated) are interpolated linearly and held flat
    /// outside. Monotone in supply whenever the envelope is.
    pub fn estimate(&self, shape: Option<&Shape>, vcc_v: f64) -> f64 {
        let n = self.env.len();
        let (Some(s), false) = (shape, self.u.is_empty()) else {
            return interp(&self.vcc_v, &self.env, vcc_v);
        };
        let uv = s.ln_g(vcc_v);
        if n == 1 || vcc_v <= self.vcc_v[0] {
            return self.env[0] * (uv - self.u[0]).exp();
        }
        if vcc_v >= self.vcc_v[n - 1] {
            return self.env[n - 1] * (uv - self.u[n - 1]).exp();
        }
        let i = self.vcc_v.partition_point(|&v| v <= vcc_v).clamp(1, n - 1);
        let (a, b) = (i - 1, i);
        let f = (uv - self.u[a]) / (self.u[b] - self.u[a]);
        let (la, lb) = (self.env[a].ln(), self.env[b].ln());
        (la + f.clamp(0.0, 1.0) * (lb - la)).exp()
    }

    /// The guaranteed value at a supply and whether a data-sheet column covers it. An upper
    /// bound takes the column at or below the supply (the slower neighbour), a lower bound the
    /// column at or above it; beyond the covered end the estimate stands in, never better than
    /// the outermost column, and `false` says so.
    pub fn bound_at(&self, shape: Option<&Shape>, vcc_v: f64) -> (f64, bool) {
        const EPS: f64 = 1e-9;
        let n = self.env.len();
        match self.bound {
            Bound::Upper => {
                if vcc_v < self.vcc_v[0] - EPS {
                    return (self.estimate(shape, vcc_v).max(self.env[0]), false);
                }
                let i = self.vcc_v.partition_point(|&v| v <= vcc_v + EPS);
                (self.env[i.saturating_sub(1)], true)
            }
            Bound::Lower => {
                if vcc_v > self.vcc_v[n - 1] + EPS {
                    return (self.estimate(shape, vcc_v).min(self.env[n - 1]), false);
                }
                let i = self.vcc_v.partition_point(|&v| v < vcc_v - EPS);
                (self.env[i.min(n - 1)], true)
            }
        }
    }

    /// Whether a supply lies exactly on one of the row's columns.
    pub fn on_column(&self, vcc_v: f64) -> bool {
        self.vcc_v.iter().any(|v| (v - vcc_v).abs() < 1e-9)
    }

    /// Whether a supply lies strictly between the row's first and last columns.
    pub fn inside(&self, vcc_v: f64) -> bool {
        vcc_v > self.vcc_v[0] && vcc_v < self.vcc_v[self.vcc_v.len() - 1]
    }
}

/// Piecewise-linear interpolation of `ys` over ascending `xs`, clamped at both ends.
pub(crate) fn interp(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    match xs.len() {
        0 => 0.0,
        1 => ys[0],
        n => {
            if x <= xs[0] {
                return ys[0];
            }
            if x >= xs[n - 1] {
                return ys[n - 1];
            }
            let i = xs.partition_point(|&v| v <= x).clamp(1, n - 1);
            let t = (x - xs[i - 1]) / (xs[i] - xs[i - 1]);
            ys[i - 1] + t * (ys[i] - ys[i - 1])
        }
    }
}

/// Whether a row's values follow the voltage model: all positive and not all equal (flat rows,
/// such as a hold limit of 5 ns at every supply, are held as given).
pub(crate) fn follows_model(ns: &[f64]) -> bool {
    ns.iter().all(|v| *v > 0.0) && ns.iter().any(|v| *v != ns[0])
}

/// A temperature column: the row guaranteed over `temp_lo_c…temp_c`.
#[derive(Clone, Debug)]
pub struct Column {
    /// Lowest temperature the column covers (25 for a "25 °C" column, the part's lowest rated
    /// temperature for a "−40…85 °C" one).
    pub temp_lo_c: f64,
    /// Upper temperature of the data sheet's column (25, 85, 125 …).
    pub temp_c: f64,
    /// Its values.
    pub series: Series,
}

impl Column {
    /// Whether the column's guarantee covers an ambient temperature.
    pub fn covers(&self, temp_c: f64) -> bool {
        temp_c >= self.temp_lo_c - 1e-9 && temp_c <= self.temp_c + 1e-9
    }
}

/// A timing arc of a part with its data-sheet rows.
#[derive(Clone, Debug)]
pub struct TimingArc {
    /// Arc name, e.g. "CLK->Q" ("CLK" for the clock's own limits).
    pub name: String,
    /// Meaning.
    pub kind: ArcKind,
    /// Source of the values (document and table).
    pub source: String,
    /// Seen or from memory.
    pub status: Status,
    /// Guaranteed values (max for delays, the limit for the others) per temperature column.
    pub worst: Vec<Column>,
    /// Typical row at 25 °C, if the data sheet gives one.
    pub typ: Option<Series>,
    /// Status of the typical row.
    pub typ_status: Status,
    /// Guaranteed minimum (contamination) delays per temperature column, rarely given.
    pub min: Vec<Column>,
    /// For a generic part: the same arc of each vendor variant (part, arc); its value is the
    /// worst of theirs and the rows above are empty.
    pub variants: Vec<(usize, usize)>,
}

/// A part type.
#[derive(Clone, Debug)]
pub struct Part {
    /// Type name, e.g. "74HC574" (generic) or "74HC574/ti-cd" (one vendor's data sheet).
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
    /// Lowest rated ambient temperature of this part (the family's unless the data sheet says).
    pub temp_min_c: f64,
    /// Highest rated ambient temperature.
    pub temp_max_c: f64,
    /// The clock edge the part acts on.
    pub clock_edge: ActiveEdge,
    /// Its arcs.
    pub arcs: Vec<TimingArc>,
    /// The file it came from.
    pub origin: String,
    /// For a generic part made from vendor variants: the variants (indices into `parts`).
    pub variants: Vec<usize>,
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

    /// Whether the part is the worst of vendor variants rather than one data sheet.
    pub fn is_generic(&self) -> bool {
        !self.variants.is_empty()
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
    /// Package pins of the built-in part types (`library/pins.toml`, read by `pins.rs`).
    pub pinouts: Vec<Pinout>,
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

/// What a pin does.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum PinRole {
    /// A data or address input.
    Input,
    /// The clock (or write strobe) a capture is timed against.
    Clock,
    /// An enable: output enable, chip enable, count or input enable.
    Enable,
    /// Another control input (clear, load, direction).
    Control,
    /// An output.
    Output,
    /// A data pin that is input and output.
    Bidirectional,
    /// Supply.
    Power,
    /// Ground.
    Ground,
    /// No internal connection ("n.c." in the pin table): belongs to no arc.
    #[serde(rename = "nc")]
    NotConnected,
}

impl PinRole {
    /// The role in words.
    pub fn word(self) -> &'static str {
        match self {
            PinRole::Input => "input",
            PinRole::Clock => "clock",
            PinRole::Enable => "enable",
            PinRole::Control => "control",
            PinRole::Output => "output",
            PinRole::Bidirectional => "bidirectional",
            PinRole::Power => "power",
            PinRole::Ground => "ground",
            PinRole::NotConnected => "not connected",
        }
    }
}

/// One package pin.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Pin {
    /// Pin number, from 1.
    pub number: u32,
    /// Its name in the data sheet.
    pub name: String,
    /// The group the part's arcs call it by ("D", "CLK", "Q").
    pub group: String,
    /// What it does.
    pub role: PinRole,
}

/// A part type's package pins.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Pinout {
    /// The library types it belongs to (and their vendor variants).
    pub types: Vec<String>,
    /// Package, e.g. "DIP-20".
    pub package: String,
    /// The data sheet (and table) it was read from.
    pub source: String,
    /// Seen, secondary or from memory.
    pub status: Status,
    /// The pins, pin 1 first.
    pub pins: Vec<Pin>,
}

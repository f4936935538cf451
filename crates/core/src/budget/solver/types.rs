//! What the solver reports: the budget of a design at one operating point and its parts (phases,
//! paths, endpoints, hold checks, clock slack, model notes), and a point of a supply sweep.

use std::collections::BTreeMap;

use serde::Serialize;

use crate::budget::derate::Corner;
use crate::budget::design::model::{Design, Edge};
use crate::budget::library::model::ErrStats;

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
    /// The model's estimate of this step (absent when it equals the delay: on a data-sheet
    /// column, a fixed delay, or a family not derated).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub estimate_ns: Option<f64>,
    /// The estimate's worst error in % found by leaving data-sheet columns out (None: exact).
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
    /// A half-cycle path without a clock: it passes when the opposite phase lasts at least
    /// `passes_if_phase_ns` (unknown minima counted as 0 ns, so the condition is safe).
    PassesIf,
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
    /// early arrival + opposite phase (when a clock is given) − capture clock latency − hold
    /// (+ common clock credit when asked for).
    pub slack_ns: f64,
    /// Verdict.
    pub status: HoldStatus,
    /// For a half-cycle path without a clock: the shortest opposite phase with which it passes.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub passes_if_phase_ns: Option<f64>,
    /// The phase that gives the credit ("low" for paths of the high phase, and the reverse).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub credit_phase: Option<Phase>,
    /// Common clock path credit taken, ns (0 unless asked for).
    pub common_clock_credit_ns: f64,
}

/// What sets a phase's requirement.
#[derive(Clone, Copy, Debug, Serialize, PartialEq, Eq)]
#[serde(rename_all = "kebab-case")]
pub enum LimitKind {
    /// The slowest signal path.
    Path,
    /// A clocked part's minimum clock pulse width.
    PulseWidth,
    /// A clocked part's guaranteed maximum clock frequency.
    PartFmax,
    /// Nothing constrains the phase.
    None,
}

/// One phase's requirement: the slowest path against the clocked parts' own limit.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct PhaseLimit {
    /// Which one binds.
    pub binds: LimitKind,
    /// What the slowest path needs, ns (0 when none).
    pub path_ns: f64,
    /// The largest clocked-part limit on this phase, ns (pulse width, or 1/f_max for the
    /// period; 0 when none).
    pub part_ns: f64,
    /// Which part and limit that is, e.g. "U23 74HC574 CLK pulse width".
    #[serde(skip_serializing_if = "String::is_empty")]
    pub part: String,
}

impl PhaseLimit {
    /// The requirement: the larger of the path and the part limit.
    pub fn required_ns(&self) -> f64 {
        self.path_ns.max(self.part_ns)
    }

    /// The binding limit in words.
    pub fn words(&self) -> String {
        match self.binds {
            LimitKind::Path => "the slowest path".to_string(),
            LimitKind::PulseWidth => self.part.clone(),
            LimitKind::PartFmax => format!("{} (part f_max)", self.part),
            LimitKind::None => "nothing".to_string(),
        }
    }
}

/// The requirement of each phase with what sets it.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct PhaseLimits {
    /// Low phase.
    pub low: PhaseLimit,
    /// High phase.
    pub high: PhaseLimit,
    /// Full period.
    pub period: PhaseLimit,
}

/// The budget again with the model's estimate of every value, beside the guaranteed one.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct Estimate {
    /// L by the estimate.
    pub low_required_ns: f64,
    /// H by the estimate.
    pub high_required_ns: f64,
    /// P by the estimate.
    pub period_required_ns: f64,
    /// d* by the estimate.
    pub best_duty: f64,
    /// f_max at d* by the estimate.
    pub fmax_best_duty_hz: f64,
    /// f_max at 50 % duty by the estimate.
    pub fmax_50_hz: f64,
    /// The estimate's error range in % (most optimistic, most pessimistic) over every value
    /// that lies off the data-sheet columns, from leaving columns out; None when all lie on one.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error_low_pct: Option<f64>,
    /// See `error_low_pct`.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub error_high_pct: Option<f64>,
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
    /// For each short phase, what it is short of, e.g. "low phase: U23 74HC574 CLK (minimum
    /// pulse width)".
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub short_of: Vec<String>,
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
    /// The estimate between two columns, each column left out in turn.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub estimate_between: Option<ErrStats>,
    /// The estimate above a row's highest column, found the same way.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub estimate_above: Option<ErrStats>,
    /// The estimate below a row's lowest column (used only where nothing is guaranteed).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub estimate_below: Option<ErrStats>,
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
    /// What sets L, H and P: the slowest path, a part's pulse width or its f_max.
    pub limits: PhaseLimits,
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
    /// The same budget by the model's estimate (not guaranteed).
    pub estimate: Estimate,
    /// False when any part runs outside its data sheet's supply or temperature range, or where
    /// no data-sheet column covers its conditions.
    pub in_spec: bool,
    /// True when every value is covered by a data-sheet column (the budget is a guarantee).
    pub guaranteed: bool,
    /// The parts (reference and type) outside their data sheets' supply or temperature ranges.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub out_of_spec_parts: Vec<String>,
    /// The parts (reference and type) with a value no data-sheet column covers.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub not_guaranteed_parts: Vec<String>,
    /// Out-of-spec conditions and other caveats, one sentence each.
    pub warnings: Vec<String>,
    /// Voltage models used.
    pub models: Vec<ModelNote>,
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
    /// Whether every value at this supply is covered by a data-sheet column.
    pub guaranteed: bool,
    /// f_max at 50 % duty by the estimate.
    pub estimate_fmax_50_hz: f64,
    /// f_max at d* by the estimate.
    pub estimate_fmax_best_duty_hz: f64,
    /// What sets L, H and P here.
    pub binds: [LimitKind; 3],
    /// The parts (reference and type) outside their data sheets' ranges here.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub out_of_spec_parts: Vec<String>,
    /// The parts (reference and type) with a value no data-sheet column covers here.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub not_guaranteed_parts: Vec<String>,
    /// Whether the clock asked for fits at this supply (absent without a clock).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub clock_meets: Option<bool>,
    /// The budget's warnings at this supply (a renderer prints each once for the whole sweep).
    #[serde(skip)]
    pub warnings: Vec<String>,
}

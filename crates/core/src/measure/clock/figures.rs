//! The figures of one clock channel as reported: [`ClockSnapshot`] and the pieces it is made of.

use serde::Serialize;

use crate::units::{ns, pm};

/// A figure the probe could not observe, and why.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Unavailable {
    /// Which figure.
    pub figure: String,
    /// Why.
    pub reason: String,
}

/// Percentiles of a time distribution, ns.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Percentiles {
    /// 0.1 %.
    pub p0_1: f64,
    /// 1 %.
    pub p1: f64,
    /// Median.
    pub p50: f64,
    /// 99 %.
    pub p99: f64,
    /// 99.9 %.
    pub p99_9: f64,
}

/// N-cycle error figures.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct NCycle {
    /// N.
    pub n: u32,
    /// RMS of (t(k+N) − t(k)) − N·T, ns.
    pub rms_ns: f64,
    /// Largest |·|, ns.
    pub max_abs_ns: f64,
    /// RMS less the quantisation of its two stamps, √(rms² − q²/6), ns (0 when quantisation
    /// explains all of it).
    pub debiased_ns: f64,
    /// Uncertainty of the de-biased value (k = 2.5), ns.
    pub uncertainty_ns: f64,
    /// The uncertainty covers zero: the value is a bound (debiased + U), not an estimate.
    pub below_resolution: bool,
}

/// An Allan deviation point.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct AllanPoint {
    /// τ, s.
    pub tau_s: f64,
    /// Overlapping Allan deviation (fractional frequency).
    pub adev: f64,
    /// Terms in the estimate.
    pub terms: u64,
}

/// One phase shorter than its threshold, as the probe stamped it.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct ShortPhaseEvent {
    /// When the phase began, s of probe time.
    pub at_s: f64,
    /// "high" or "low".
    pub phase: &'static str,
    /// Its length, ns (± one tick).
    pub length_ns: f64,
}

/// The probe's threshold counts: every cycle whose high or low time was shorter than the
/// threshold the host set, counted by the probe over the windows.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ThresholdViolations {
    /// High-time threshold in force, ns (None: not counted).
    pub high_threshold_ns: Option<f64>,
    /// Low-time threshold in force, ns (None: not counted).
    pub low_threshold_ns: Option<f64>,
    /// Cycles whose high time was shorter.
    pub high_short: u64,
    /// Cycles whose low time was shorter.
    pub low_short: u64,
    /// Windows counted.
    pub windows: u64,
    /// The first short phases the probe stamped (a few per window, at most 200).
    pub first: Vec<ShortPhaseEvent>,
}

impl ThresholdViolations {
    /// Short phases of either kind.
    pub fn total(&self) -> u64 {
        self.high_short + self.low_short
    }
}

/// The measured clock of one channel. Uncertainties are expanded (k = 2.5).
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct ClockSnapshot {
    /// Channel id.
    pub channel: u8,
    /// Its label.
    pub label: String,
    /// "edge timestamps" or "count windows".
    pub method: String,
    /// Probe tick: the resolution of every single time, ns.
    pub resolution_ns: f64,
    /// How the cycles were observed: "continuous" (every edge stamped), "bursts" (stamped in
    /// stretches: a burst-mode probe or a link that fell behind), "count-windows" or
    /// "window-extremes" (every cycle timed by the probe, its extremes sent per window).
    pub observation: String,
    /// Share of the elapsed cycles that were stamped (0…1); the worst-cycle figures are the
    /// worst of these cycles only. Window extremes: the share of the elapsed time the windows
    /// received cover (1.0 when every window arrived: every cycle was observed).
    pub coverage: Option<f64>,
    /// Edges seen.
    pub edges: u64,
    /// Complete periods measured.
    pub cycles: u64,
    /// Count windows received (a counting probe), and the input cycles they counted.
    pub count_windows: u64,
    /// Input cycles counted over those windows.
    pub counted_cycles: u64,
    /// Frequency (reciprocal counting: measured periods over their total time).
    pub frequency_hz: Option<f64>,
    /// Its uncertainty (resolution and jitter; k = 2.5).
    pub frequency_uncertainty_hz: Option<f64>,
    /// Timebase accuracy the probe states (separate from resolution), Hz.
    pub frequency_accuracy_hz: Option<f64>,
    /// Mean period.
    pub period_mean_ns: Option<f64>,
    /// Shortest period.
    pub period_min_ns: Option<f64>,
    /// Longest period.
    pub period_max_ns: Option<f64>,
    /// Mean high time.
    pub high_mean_ns: Option<f64>,
    /// Shortest high time (the worst cycle; ± one tick).
    pub high_min_ns: Option<f64>,
    /// When it happened, s of probe time.
    pub high_min_at_s: Option<f64>,
    /// Which cycle.
    pub high_min_cycle: Option<u64>,
    /// Longest high time.
    pub high_max_ns: Option<f64>,
    /// Mean low time.
    pub low_mean_ns: Option<f64>,
    /// Shortest low time (the worst cycle; ± one tick).
    pub low_min_ns: Option<f64>,
    /// When it happened.
    pub low_min_at_s: Option<f64>,
    /// Which cycle.
    pub low_min_cycle: Option<u64>,
    /// Longest low time.
    pub low_max_ns: Option<f64>,
    /// Duty cycle: mean high / mean period.
    pub duty: Option<f64>,
    /// Its uncertainty (k = 2.5).
    pub duty_uncertainty: Option<f64>,
    /// Why the duty is less certain than it looks (a phase of a tick or two), when it is.
    pub duty_note: Option<String>,
    /// Statistical duty from level samples, with its Wilson 95 % interval.
    pub duty_sampled: Option<(f64, f64, f64)>,
    /// Period jitter RMS as measured (sample standard deviation of periods).
    pub period_jitter_rms_ns: Option<f64>,
    /// Period jitter RMS, population form (÷N).
    pub period_jitter_rms_pop_ns: Option<f64>,
    /// Quantisation floor of period jitter at random phase: q/√6.
    pub period_jitter_floor_ns: f64,
    /// True when the de-biased jitter's uncertainty covers zero (below resolution).
    pub period_jitter_below_resolution: bool,
    /// De-biased estimate √(s² − q²/6), labelled as such.
    pub period_jitter_debiased_ns: Option<f64>,
    /// Uncertainty of the jitter estimate (k = 2.5).
    pub period_jitter_uncertainty_ns: Option<f64>,
    /// Period peak to peak.
    pub period_jitter_pkpk_ns: Option<f64>,
    /// Periods in the jitter figures.
    pub period_jitter_n: u64,
    /// Cycle-to-cycle jitter RMS (adjacent period differences).
    pub cycle_to_cycle_rms_ns: Option<f64>,
    /// Largest |adjacent period difference|.
    pub cycle_to_cycle_max_ns: Option<f64>,
    /// Quantisation floor of cycle-to-cycle jitter at random phase: q/√2 (three stamps,
    /// weights 1, −2, 1: 6·q²/12).
    pub cycle_to_cycle_floor_ns: f64,
    /// Cycle-to-cycle RMS less that quantisation, √(rms² − q²/2) (0 when it explains all).
    pub cycle_to_cycle_debiased_ns: Option<f64>,
    /// Uncertainty of the de-biased cycle-to-cycle value (k = 2.5), ns.
    pub cycle_to_cycle_uncertainty_ns: Option<f64>,
    /// The uncertainty covers zero: de-biased + U is a bound, not an estimate.
    pub cycle_to_cycle_below_resolution: bool,
    /// TIE RMS against a least-squares ideal clock over the window.
    pub tie_rms_ns: Option<f64>,
    /// Largest TIE peak to peak within detrended records.
    pub tie_pkpk_ns: Option<f64>,
    /// Cycles per TIE record.
    pub tie_record_cycles: usize,
    /// N-cycle error.
    pub n_cycle: Vec<NCycle>,
    /// Overlapping Allan deviation (session).
    pub allan: Vec<AllanPoint>,
    /// Period percentiles.
    pub period_percentiles: Option<Percentiles>,
    /// High-time percentiles.
    pub high_percentiles: Option<Percentiles>,
    /// Low-time percentiles.
    pub low_percentiles: Option<Percentiles>,
    /// Histograms of period, high and low time: (ns, cycles) of each non-empty tick bucket,
    /// ascending (for the live view's pictures; not in JSON).
    #[serde(skip)]
    pub histograms: [Vec<(f64, u64)>; 3],
    /// Glitches counted.
    pub glitches: u64,
    /// Stalls counted.
    pub stalls: u64,
    /// Cycles left out of every figure: the first cycles of a run, judged with typical values
    /// that a stall or slow start inside the very first period seeded (the engine seeded again
    /// and dropped them; their edges still count).
    pub cycles_set_aside: u64,
    /// Figures the probe cannot observe, and why.
    pub unavailable: Vec<Unavailable>,
    /// The probe's threshold counts (a probe that counts the cycles shorter than thresholds
    /// the host set; absent otherwise).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub violations: Option<ThresholdViolations>,
}

impl ClockSnapshot {
    /// The figures of a channel with a tick of `q` ns before anything is measured: floors
    /// only, every figure absent.
    pub(super) fn empty(
        channel: u8,
        label: &str,
        q: f64,
        tie_record_cycles: usize,
    ) -> ClockSnapshot {
        let floor = q / 6f64.sqrt();
        ClockSnapshot {
            channel,
            label: label.to_string(),
            method: "edge timestamps".into(),
            resolution_ns: q,
            observation: "continuous".into(),
            coverage: None,
            edges: 0,
            cycles: 0,
            count_windows: 0,
            counted_cycles: 0,
            frequency_hz: None,
            frequency_uncertainty_hz: None,
            frequency_accuracy_hz: None,
            period_mean_ns: None,
            period_min_ns: None,
            period_max_ns: None,
            high_mean_ns: None,
            high_min_ns: None,
            high_min_at_s: None,
            high_min_cycle: None,
            high_max_ns: None,
            low_mean_ns: None,
            low_min_ns: None,
            low_min_at_s: None,
            low_min_cycle: None,
            low_max_ns: None,
            duty: None,
            duty_uncertainty: None,
            duty_note: None,
            duty_sampled: None,
            period_jitter_rms_ns: None,
            period_jitter_rms_pop_ns: None,
            period_jitter_floor_ns: floor,
            period_jitter_below_resolution: false,
            period_jitter_debiased_ns: None,
            period_jitter_uncertainty_ns: None,
            period_jitter_pkpk_ns: None,
            period_jitter_n: 0,
            cycle_to_cycle_rms_ns: None,
            cycle_to_cycle_max_ns: None,
            cycle_to_cycle_floor_ns: q / 2f64.sqrt(),
            cycle_to_cycle_debiased_ns: None,
            cycle_to_cycle_uncertainty_ns: None,
            cycle_to_cycle_below_resolution: false,
            tie_rms_ns: None,
            tie_pkpk_ns: None,
            tie_record_cycles,
            n_cycle: Vec::new(),
            allan: Vec::new(),
            period_percentiles: None,
            high_percentiles: None,
            low_percentiles: None,
            histograms: [Vec::new(), Vec::new(), Vec::new()],
            glitches: 0,
            stalls: 0,
            cycles_set_aside: 0,
            unavailable: Vec::new(),
            violations: None,
        }
    }

    /// The label of a worst-cycle figure: "WORST", or "worst of the observed cycles (N % of
    /// all)" when not every cycle was stamped.
    pub fn worst_label(&self) -> String {
        match self.observed_share() {
            Some(share) => format!("worst of the observed cycles ({share})"),
            None => "WORST".into(),
        }
    }

    /// "N % of all" when not every cycle was stamped (None for a continuous stream, and for
    /// window extremes of which every window arrived).
    pub fn observed_share(&self) -> Option<String> {
        match self.coverage {
            Some(c) if !self.every_cycle_observed() => Some(format!("{} of all", percent(c))),
            _ => None,
        }
    }

    /// Whether every cycle was observed: every edge stamped ("continuous"), or every cycle
    /// timed by the probe and every window of its extremes received ("window-extremes" with a
    /// coverage of 1).
    pub fn every_cycle_observed(&self) -> bool {
        match self.observation.as_str() {
            "continuous" => true,
            "window-extremes" => self.coverage.is_some_and(|c| c >= 1.0 - 1e-9),
            _ => false,
        }
    }

    /// The de-biased cycle-to-cycle figure in words: "X ± U" or "below resolution, < B".
    pub fn cycle_to_cycle_text(&self) -> String {
        match (
            self.cycle_to_cycle_debiased_ns,
            self.cycle_to_cycle_uncertainty_ns,
        ) {
            (Some(d), Some(u)) => debiased_text(d, u, self.cycle_to_cycle_below_resolution),
            _ => "—".into(),
        }
    }

    /// The period jitter as text, the same figures as the JSON: the de-biased estimate with its
    /// uncertainty and the raw spread beside it; "below resolution" (with the bound) when the
    /// uncertainty covers zero. `compact`: the bound or the estimate with the raw spread only.
    pub fn jitter_text(&self, compact: bool) -> String {
        let (Some(d), Some(u), Some(raw)) = (
            self.period_jitter_debiased_ns,
            self.period_jitter_uncertainty_ns,
            self.period_jitter_rms_ns,
        ) else {
            return "—".into();
        };
        if compact {
            return if self.period_jitter_below_resolution {
                format!("below resolution (< {}), raw {}", ns(d + u), ns(raw))
            } else {
                format!("{} ± {} (de-biased), raw {}", ns(d), ns(u), ns(raw))
            };
        }
        if self.period_jitter_below_resolution {
            format!(
                "below resolution (< {}); de-biased {}, raw {} RMS",
                ns(d + u),
                pm(d * 1e-9, u * 1e-9, "s"),
                ns(raw)
            )
        } else {
            format!(
                "{} RMS (de-biased), raw {}, pk-pk {} over N = {}",
                pm(d * 1e-9, u * 1e-9, "s"),
                ns(raw),
                self.period_jitter_pkpk_ns
                    .map_or("—".into(), |v| ns(v).to_string()),
                self.period_jitter_n
            )
        }
    }

    /// Say that `figure` cannot be observed, and why.
    pub(super) fn mark_unavailable(&mut self, figure: &str, reason: &str) {
        self.unavailable.push(Unavailable {
            figure: figure.into(),
            reason: reason.into(),
        });
    }
}

/// A share as a percentage with two significant digits (at least one decimal below 10 %).
fn percent(share: f64) -> String {
    let p = share * 100.0;
    if p >= 10.0 {
        format!("{p:.0} %")
    } else if p >= 1.0 {
        format!("{p:.1} %")
    } else {
        let digits = (1 - (p.max(1e-9)).log10().floor() as i32).clamp(1, 9) as usize;
        format!("{p:.digits$} %")
    }
}

impl NCycle {
    /// The de-biased N-cycle figure in words: "X ± U" or "below resolution, < B".
    pub fn debiased_text(&self) -> String {
        debiased_text(self.debiased_ns, self.uncertainty_ns, self.below_resolution)
    }
}

/// A de-biased spread with its uncertainty, or the bound it gives when U covers zero.
fn debiased_text(d_ns: f64, u_ns: f64, below: bool) -> String {
    if below {
        format!("below resolution, < {}", ns(d_ns + u_ns))
    } else {
        pm(d_ns * 1e-9, u_ns * 1e-9, "s")
    }
}

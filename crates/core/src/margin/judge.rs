//! One set of measured phases against one budget, and the verdict: the ±tick rule (a slack is
//! known to be positive only when it exceeds its measurement bound, negative only when it is
//! below minus that bound) and the order in which the states are decided.

use serde::Serialize;

use crate::budget::{Budget, Corner};

/// What the measurement says about the sign of one slack.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Sign {
    /// Slack > its bound: the phase fits, whatever the quantisation.
    Clears,
    /// |slack| ≤ its bound: the sign is not known at this resolution.
    WithinResolution,
    /// Slack < −bound: the phase is too short, whatever the quantisation.
    Short,
}

impl Sign {
    /// The sign of `slack_ns` measured to ± `bound_ns`.
    pub fn of(slack_ns: f64, bound_ns: f64) -> Sign {
        if slack_ns > bound_ns {
            Sign::Clears
        } else if slack_ns < -bound_ns {
            Sign::Short
        } else {
            Sign::WithinResolution
        }
    }
}

/// One phase against one budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct PhaseSlack {
    /// "low", "high" or "period".
    pub phase: &'static str,
    /// What the budget requires, ns.
    pub required_ns: f64,
    /// The measured worst (shortest) one, ns.
    pub measured_ns: f64,
    /// measured − required, ns.
    pub slack_ns: f64,
    /// Slack as a percentage of the requirement.
    pub slack_pct: Option<f64>,
    /// Bound on the measurement (± one tick, or the mean phases' uncertainty), ns.
    pub uncertainty_ns: f64,
    /// What that bound leaves of the slack's sign.
    pub sign: Sign,
}

/// All phases against one budget.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Against {
    /// The budget's corner.
    pub corner: Corner,
    /// Low, high, period.
    pub phases: Vec<PhaseSlack>,
    /// Every phase has slack ≥ 0 as measured.
    pub inside: bool,
    /// Every phase clears its requirement by more than its bound.
    pub inside_beyond_doubt: bool,
    /// Some phase is short by more than its bound.
    pub short_beyond_doubt: bool,
    /// The smallest slack in % of its requirement.
    pub worst_slack_pct: Option<f64>,
    /// f_max of this budget at the measured duty, Hz.
    pub fmax_at_duty_hz: f64,
}

impl Against {
    /// The phases whose slack's sign the resolution leaves open.
    pub fn unresolved(&self) -> impl Iterator<Item = &PhaseSlack> {
        self.phases
            .iter()
            .filter(|p| p.sign == Sign::WithinResolution)
    }

    /// Whether every phase clears `guard` × its requirement beyond its bound.
    pub fn meets_guard_band(&self, guard: f64) -> bool {
        self.phases
            .iter()
            .all(|p| p.slack_ns - p.uncertainty_ns >= guard * p.required_ns)
    }
}

/// The measured worst phases (ns) and their common bound.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Measured {
    pub low_ns: f64,
    pub high_ns: f64,
    pub period_ns: f64,
    pub bound_ns: f64,
    pub duty: f64,
}

/// The measured phases against one budget.
pub(super) fn against(budget: &Budget, m: &Measured) -> Against {
    let mk = |phase, req: f64, meas: f64| {
        let slack = meas - req;
        PhaseSlack {
            phase,
            required_ns: req,
            measured_ns: meas,
            slack_ns: slack,
            slack_pct: (req > 0.0).then(|| 100.0 * slack / req),
            uncertainty_ns: m.bound_ns,
            sign: Sign::of(slack, m.bound_ns),
        }
    };
    let phases = vec![
        mk("low", budget.low_required_ns, m.low_ns),
        mk("high", budget.high_required_ns, m.high_ns),
        mk("period", budget.period_required_ns, m.period_ns),
    ];
    let inside = phases.iter().all(|p| p.slack_ns >= 0.0);
    let inside_beyond_doubt = phases.iter().all(|p| p.sign == Sign::Clears);
    let short_beyond_doubt = phases.iter().any(|p| p.sign == Sign::Short);
    let worst_slack_pct = phases
        .iter()
        .filter_map(|p| p.slack_pct)
        .min_by(f64::total_cmp);
    let t = crate::budget::solver::min_period_ns(
        budget.low_required_ns,
        budget.high_required_ns,
        budget.period_required_ns,
        m.duty.clamp(0.01, 0.99),
    );
    Against {
        corner: budget.corner,
        phases,
        inside,
        inside_beyond_doubt,
        short_beyond_doubt,
        worst_slack_pct,
        fmax_at_duty_hz: 1e9 / t,
    }
}

/// Where the builder stands (JSON: kebab-case, stable).
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// Every phase clears the guaranteed budget by more than its measurement bound.
    InsideWorstCase,
    /// No phase is short of the guaranteed budget beyond doubt, but the sign of some slack is
    /// not known at this resolution.
    WithinResolution,
    /// Short of the guaranteed budget beyond doubt; every phase clears the typical one.
    BeyondWorstCaseInsideTypical,
    /// Short of the guaranteed budget, and not shown inside the typical one either.
    BeyondTypical,
    /// The machine showed a failure: glitches on the clock, the fault line, a stopped
    /// heartbeat, a stall.
    Failed,
}

impl Verdict {
    /// The verdict the slacks alone give (a failure is decided elsewhere): a state claims
    /// only what the measurement shows beyond its bound.
    pub fn of_slack(worst_case: &Against, typical: &Against) -> Verdict {
        if worst_case.short_beyond_doubt {
            if typical.inside_beyond_doubt {
                Verdict::BeyondWorstCaseInsideTypical
            } else {
                Verdict::BeyondTypical
            }
        } else if worst_case.inside_beyond_doubt {
            Verdict::InsideWorstCase
        } else {
            Verdict::WithinResolution
        }
    }

    /// Whether the margin counts as broken (exit code 3): beyond a budget or failed, and
    /// within resolution only when `strict`.
    pub fn breaks_margin(self, strict: bool) -> bool {
        match self {
            Verdict::InsideWorstCase => false,
            Verdict::WithinResolution => strict,
            _ => true,
        }
    }

    /// Its JSON name.
    pub fn name(self) -> &'static str {
        match self {
            Verdict::InsideWorstCase => "inside-worst-case",
            Verdict::WithinResolution => "within-resolution",
            Verdict::BeyondWorstCaseInsideTypical => "beyond-worst-case-inside-typical",
            Verdict::BeyondTypical => "beyond-typical",
            Verdict::Failed => "failed",
        }
    }

    /// The state in a few words.
    pub fn words(self) -> &'static str {
        match self {
            Verdict::InsideWorstCase => "inside the worst-case budget",
            Verdict::WithinResolution => "within resolution of the worst-case budget",
            Verdict::BeyondWorstCaseInsideTypical => {
                "beyond the worst-case budget, inside the typical one"
            }
            Verdict::BeyondTypical => {
                "no margin left: beyond the worst-case budget, not shown inside the typical one"
            }
            Verdict::Failed => "FAILED",
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The ±tick rule at both signs: a slack smaller than the bound leaves the sign open,
    /// whichever it is; the bound itself counts as not known (the tick is a closed bound).
    #[test]
    fn signs_at_the_bound() {
        assert_eq!(Sign::of(5.8, 8.0), Sign::WithinResolution);
        assert_eq!(Sign::of(-5.8, 8.0), Sign::WithinResolution);
        assert_eq!(Sign::of(8.0, 8.0), Sign::WithinResolution);
        assert_eq!(Sign::of(-8.0, 8.0), Sign::WithinResolution);
        assert_eq!(Sign::of(8.1, 8.0), Sign::Clears);
        assert_eq!(Sign::of(-8.1, 8.0), Sign::Short);
    }

    #[test]
    fn exit_rule() {
        assert!(!Verdict::InsideWorstCase.breaks_margin(true));
        assert!(!Verdict::WithinResolution.breaks_margin(false));
        assert!(Verdict::WithinResolution.breaks_margin(true));
        for v in [
            Verdict::BeyondWorstCaseInsideTypical,
            Verdict::BeyondTypical,
            Verdict::Failed,
        ] {
            assert!(v.breaks_margin(false));
        }
    }
}

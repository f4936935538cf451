//! The clock plan from the phase requirements L, H, P (each the larger of its slowest path and
//! the clocked parts' pulse width or f_max): d* = H/(L+H), T_min(d) = max(L/(1−d), H/d, P),
//! f_max; and how a given clock meets each endpoint and hold check.

use super::propagate::PendingHold;
use super::types::{
    ClockInput, ClockSlack, DutyPoint, Endpoint, HoldCheck, HoldStatus, Phase, PhaseLimits,
};

/// T_min(d) = max(L/(1−d), H/d, P).
pub fn min_period_ns(low_ns: f64, high_ns: f64, period_ns: f64, duty: f64) -> f64 {
    (low_ns / (1.0 - duty)).max(high_ns / duty).max(period_ns)
}

/// d* = H/(L+H) (0.5 when neither phase is constrained).
fn best_duty(low_ns: f64, high_ns: f64) -> f64 {
    if low_ns + high_ns > 0.0 {
        high_ns / (low_ns + high_ns)
    } else {
        0.5
    }
}

/// Slack of each phase of a clock against L, H, P.
fn clock_slack(low_ns: f64, high_ns: f64, period_ns: f64, clock: ClockInput) -> ClockSlack {
    clock_slack_of(low_ns, high_ns, period_ns, clock, None)
}

/// Slack of each phase, saying for each short phase which limit it is short of.
fn clock_slack_of(
    low_ns: f64,
    high_ns: f64,
    period_ns: f64,
    clock: ClockInput,
    limits: Option<&PhaseLimits>,
) -> ClockSlack {
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
        short_of: limits.map_or_else(Vec::new, |l| {
            [
                (ls, "low", &l.low),
                (hs, "high", &l.high),
                (ps, "period", &l.period),
            ]
            .into_iter()
            .filter(|(slack, _, _)| *slack < 0.0)
            .map(|(_, name, lim)| format!("{name}: {}", lim.words()))
            .collect()
        }),
    }
}

/// L, H, P and what follows from them for the clock and duty asked for.
pub(super) struct Plan {
    pub low_ns: f64,
    pub high_ns: f64,
    pub period_ns: f64,
    pub best_duty: f64,
    pub min_period_best_ns: f64,
    pub min_period_50_ns: f64,
    pub at_duty: Option<DutyPoint>,
    pub clock: Option<ClockSlack>,
}

impl Plan {
    /// The plan of the guaranteed budget, its clock slack naming the limit of a short phase.
    pub fn of_limits(limits: &PhaseLimits, clock: Option<ClockInput>, duty: Option<f64>) -> Plan {
        let (l, h, p) = (
            limits.low.required_ns(),
            limits.high.required_ns(),
            limits.period.required_ns(),
        );
        let mut plan = Plan::new(l, h, p, None, duty);
        plan.clock = clock.map(|c| clock_slack_of(l, h, p, c, Some(limits)));
        plan
    }

    pub fn new(l: f64, h: f64, p: f64, clock: Option<ClockInput>, duty: Option<f64>) -> Plan {
        let best = best_duty(l, h);
        Plan {
            low_ns: l,
            high_ns: h,
            period_ns: p,
            best_duty: best,
            min_period_best_ns: min_period_ns(l, h, p, best),
            min_period_50_ns: min_period_ns(l, h, p, 0.5),
            at_duty: duty.map(|d| {
                let t = min_period_ns(l, h, p, d);
                DutyPoint {
                    duty: d,
                    min_period_ns: t,
                    fmax_hz: 1e9 / t,
                }
            }),
            clock: clock.map(|c| clock_slack(l, h, p, c)),
        }
    }

    /// Each endpoint's setup slack: the clock's length of its phase minus what it needs.
    pub fn endpoint_slack(&self, endpoints: &mut [Endpoint]) {
        let Some(c) = &self.clock else {
            return;
        };
        for e in endpoints {
            let avail = match e.phase {
                Phase::Low => c.clock_low_ns,
                Phase::High => c.clock_high_ns,
                Phase::Period => c.clock_period_ns,
            };
            e.slack_ns = Some(avail - e.required_ns);
        }
    }

    /// Hold verdicts. A path launched on one edge and captured on the other has the opposite
    /// phase as credit: with a clock it is counted; without one the check says how long that
    /// phase must be. Unknown minima count as 0 ns, so a check that passes with them passes.
    pub fn hold_checks(&self, holds: Vec<PendingHold>) -> Vec<HoldCheck> {
        holds
            .into_iter()
            .map(|h| {
                let credit_phase = match h.phase {
                    Phase::High => Some(Phase::Low),
                    Phase::Low => Some(Phase::High),
                    Phase::Period => None,
                };
                let base = h.early_ns - h.clock_late_ns - h.hold_ns + h.credit_ns;
                let credit = match (credit_phase, &self.clock) {
                    (Some(Phase::Low), Some(c)) => c.clock_low_ns,
                    (Some(Phase::High), Some(c)) => c.clock_high_ns,
                    _ => 0.0,
                };
                let slack = base + credit;
                let (status, passes_if) = if slack >= 0.0 {
                    (HoldStatus::Pass, None)
                } else if credit_phase.is_some() && self.clock.is_none() {
                    (HoldStatus::PassesIf, Some(-base))
                } else if !h.known {
                    (HoldStatus::UnknownMin, None)
                } else {
                    (HoldStatus::Fail, None)
                };
                HoldCheck {
                    capture: h.capture,
                    phase: h.phase,
                    early_arrival_ns: h.early_ns,
                    hold_ns: h.hold_ns,
                    slack_ns: slack,
                    status,
                    passes_if_phase_ns: passes_if,
                    credit_phase,
                    common_clock_credit_ns: h.credit_ns,
                }
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Invented worked example (the one of tests/designs/worked-example.toml): L = 500 ns,
    // H = 125 ns → d* = 0.20, T_min = 625 ns (1.6 MHz); at 50 % duty T_min = 1000 ns (1.0 MHz).
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

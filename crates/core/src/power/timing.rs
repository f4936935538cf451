//! The timing budget at predicted rails: each section derated at the rail the power budget
//! predicts for it; without a fixed clock, the clock fixed point (the clock sets the dynamic
//! current, the current the rails, the rails the f_max); and the clock sweep of f_max against sag.

use serde::Serialize;

use super::data::SupplyData;
use super::solve::{self, PowerBudget, PowerPoint, clock_fixed_point};
use super::wiring::Wiring;
use crate::budget::{self, Budget, ClockInput, Design, Library, OperatingPoint};

/// Where the clock fixed point starts when the design plans no clock, Hz.
pub const START_HZ: f64 = 1e6;

/// What a timing budget at predicted rails is asked for.
#[derive(Clone, Copy, Debug)]
pub struct Ask<'a> {
    /// The design.
    pub design: &'a Design,
    /// Its library.
    pub lib: &'a Library,
    /// Supply data.
    pub data: &'a SupplyData,
    /// Its supply wiring.
    pub wiring: &'a Wiring,
    /// Data activity.
    pub data_activity: f64,
}

/// A timing budget derated at predicted rails.
#[derive(Clone, Debug, Serialize)]
pub struct PredictedBudget {
    /// The clock the dynamic current was computed at: the clock asked for, else the fixed point.
    pub freq_hz: f64,
    /// True when that clock was given (no clock fixed point solved).
    pub clock_given: bool,
    /// Iterations of the clock fixed point (0 with a given clock).
    pub clock_iterations: u32,
    /// False when the clock fixed point found no f_max (nothing limits the clock).
    pub settled: bool,
    /// The power budget at that clock.
    pub power: PowerBudget,
    /// The timing budget at its rails.
    pub budget: Budget,
}

impl Ask<'_> {
    fn power(&self, op: &OperatingPoint, f: f64) -> PowerBudget {
        let pt = PowerPoint {
            freq_hz: f,
            data_activity: self.data_activity,
            temp_c: op.temp_c,
        };
        solve::solve(self.design, self.lib, self.data, self.wiring, &pt)
    }

    fn with_rails(op: &OperatingPoint, pb: &PowerBudget) -> OperatingPoint {
        let mut op = op.clone();
        for s in &pb.sections {
            op.section_vcc_v.insert(s.name.clone(), s.rail_v);
        }
        op
    }

    /// The budget at the rails the clock predicts; `duty` picks the f_max the fixed point
    /// follows (50 % otherwise).
    pub fn budget(
        &self,
        op: &OperatingPoint,
        clock: Option<ClockInput>,
        duty: Option<f64>,
    ) -> PredictedBudget {
        if let Some(c) = clock {
            let power = self.power(op, c.freq_hz);
            let budget = budget::solve(
                self.design,
                self.lib,
                &Self::with_rails(op, &power),
                Some(c),
                duty,
            );
            return PredictedBudget {
                freq_hz: c.freq_hz,
                clock_given: true,
                clock_iterations: 0,
                settled: true,
                power,
                budget,
            };
        }
        let start = self.design.clock.freq_hz.unwrap_or(START_HZ);
        let fmax = |pb: &PowerBudget| {
            let b = budget::solve(self.design, self.lib, &Self::with_rails(op, pb), None, duty);
            let f = match (duty, &b.at_duty) {
                (Some(_), Some(d)) => d.fmax_hz,
                _ => b.fmax_50_hz,
            };
            f.is_finite().then_some(f)
        };
        let (f, power, n) = clock_fixed_point(start, |f| self.power(op, f), fmax);
        let budget = budget::solve(
            self.design,
            self.lib,
            &Self::with_rails(op, &power),
            None,
            duty,
        );
        PredictedBudget {
            freq_hz: power.freq_hz,
            clock_given: false,
            clock_iterations: n,
            settled: f.is_some(),
            power,
            budget,
        }
    }

    /// f_max at the rails each clock of a sweep predicts (the sag grows with the clock).
    pub fn sweep(
        &self,
        op: &OperatingPoint,
        from_hz: f64,
        to_hz: f64,
        points: usize,
    ) -> Vec<FreqPoint> {
        let points = points.max(2);
        (0..points)
            .map(|i| {
                let f = from_hz + (to_hz - from_hz) * i as f64 / (points - 1) as f64;
                let pb = self.power(op, f);
                let b = budget::solve(
                    self.design,
                    self.lib,
                    &Self::with_rails(op, &pb),
                    None,
                    None,
                );
                FreqPoint {
                    freq_hz: f,
                    total_ma: pb.total_ma,
                    rails_v: pb
                        .sections
                        .iter()
                        .map(|s| (s.name.clone(), s.rail_v))
                        .collect(),
                    fmax_50_hz: b.fmax_50_hz,
                    fmax_best_duty_hz: b.fmax_best_duty_hz,
                    estimate_fmax_50_hz: b.estimate.fmax_50_hz,
                }
            })
            .collect()
    }
}

/// One clock of a sweep at predicted rails.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct FreqPoint {
    /// The clock.
    pub freq_hz: f64,
    /// Supply current at it.
    pub total_ma: f64,
    /// Each section's predicted rail.
    pub rails_v: Vec<(String, f64)>,
    /// f_max at 50 % duty at those rails.
    pub fmax_50_hz: f64,
    /// f_max at the best duty at those rails.
    pub fmax_best_duty_hz: f64,
    /// f_max at 50 % duty by the model estimate (it moves between data-sheet columns, where the
    /// guaranteed value holds the lower column's).
    pub estimate_fmax_50_hz: f64,
}

#[cfg(test)]
mod tests {
    use super::*;

    fn demo() -> (Design, Library) {
        let lib = Library::builtin();
        (Design::demo(&lib), lib)
    }

    #[test]
    fn clock_fixed_point_on_the_demo_converges_and_is_stable() {
        let (d, lib) = demo();
        let data = SupplyData::builtin();
        let w = Wiring::of(&d).unwrap().unwrap();
        let ask = Ask {
            design: &d,
            lib: &lib,
            data: &data,
            wiring: &w,
            data_activity: 0.25,
        };
        let op = OperatingPoint::of(&d);
        let p = ask.budget(&op, None, None);
        assert!(p.settled);
        assert!(
            p.clock_iterations >= 2 && p.clock_iterations < 20,
            "{}",
            p.clock_iterations
        );
        // a fixed point: the f_max at the rails of f is f (to 1 ppm)
        assert!(
            (p.budget.fmax_50_hz / p.freq_hz - 1.0).abs() < 2e-6,
            "{} {}",
            p.budget.fmax_50_hz,
            p.freq_hz
        );
        // stable: started from there, one step stays
        let again = ask.budget(
            &op,
            Some(ClockInput {
                freq_hz: p.freq_hz,
                duty: 0.5,
            }),
            None,
        );
        assert!((again.budget.fmax_50_hz / p.freq_hz - 1.0).abs() < 2e-6);
    }

    #[test]
    fn fmax_falls_as_the_clock_deepens_the_sag() {
        let (d, lib) = demo();
        let data = SupplyData::builtin();
        let w = Wiring::of(&d).unwrap().unwrap();
        let ask = Ask {
            design: &d,
            lib: &lib,
            data: &data,
            wiring: &w,
            data_activity: 0.25,
        };
        let pts = ask.sweep(&OperatingPoint::of(&d), 1e6, 8e6, 4);
        for pair in pts.windows(2) {
            assert!(pair[1].total_ma > pair[0].total_ma);
            assert!(pair[1].rails_v[2].1 < pair[0].rails_v[2].1);
            assert!(pair[1].fmax_50_hz <= pair[0].fmax_50_hz);
            assert!(pair[1].estimate_fmax_50_hz < pair[0].estimate_fmax_50_hz);
        }
    }
}

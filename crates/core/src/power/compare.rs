//! Measured rails against the power budget: each section's current worked back from the measured
//! drops along its feed (I = ΔV / R, less what it passes on), set beside the predicted current.

use serde::Serialize;

use super::solve::PowerBudget;
use super::wiring::{FedFrom, Wiring};
use crate::budget::Design;

/// A section draws "more than predicted" when the current worked back from its rails exceeds the
/// prediction by this much (common practice, no source: a few mA is within a rail mean's noise).
pub const EXCESS_THRESHOLD_MA: f64 = 5.0;

/// One section's measured rail beside its prediction.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct RailCheck {
    /// Section.
    pub section: String,
    /// Probe rail label.
    pub rail: String,
    /// Predicted rail.
    pub predicted_v: f64,
    /// Measured mean.
    pub measured_v: f64,
    /// Measured − predicted.
    pub difference_mv: f64,
    /// The section's own current worked back from the measured drops, when its feed's both ends
    /// and every feed it passes current on to are measured.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub measured_ma: Option<f64>,
    /// The predicted own current.
    pub predicted_ma: f64,
    /// True when the worked-back current exceeds the prediction by [`EXCESS_THRESHOLD_MA`].
    pub draws_more: bool,
}

/// Compare measured rail means (label, V) with a power budget of the same design.
pub fn compare(
    design: &Design,
    wiring: &Wiring,
    pb: &PowerBudget,
    measured: &[(String, f64)],
) -> Vec<RailCheck> {
    let n = design.sections.len();
    let rail_of = |s: usize| {
        design.sections[s]
            .rail
            .as_ref()
            .and_then(|r| measured.iter().find(|(l, _)| l == r).map(|(_, v)| *v))
    };
    // measured current through each feed: the drop along it over its resistance
    let mut feed_ma: Vec<Option<f64>> = vec![None; n];
    for f in &wiring.feeds {
        let start = match f.from {
            FedFrom::Supply => Some(wiring.supply_v),
            FedFrom::Section(p) => rail_of(p),
        };
        let ohm = f.ohm(wiring);
        if let (Some(a), Some(b)) = (start, rail_of(f.section))
            && ohm > 0.0
        {
            feed_ma[f.section] = Some((a - b) / ohm * 1e3);
        }
    }
    let mut out = Vec::new();
    for s in 0..n {
        let (Some(rail), Some(v)) = (design.sections[s].rail.clone(), rail_of(s)) else {
            continue;
        };
        let Some(p) = pb.sections.get(s) else {
            continue;
        };
        let children: Vec<usize> = wiring
            .feeds
            .iter()
            .filter(|f| f.from == FedFrom::Section(s))
            .map(|f| f.section)
            .collect();
        let measured_ma = feed_ma[s].and_then(|own| {
            children
                .iter()
                .map(|&c| feed_ma[c])
                .try_fold(own, |acc, c| c.map(|c| acc - c))
        });
        out.push(RailCheck {
            section: p.name.clone(),
            rail,
            predicted_v: p.rail_v,
            measured_v: v,
            difference_mv: (v - p.rail_v) * 1e3,
            measured_ma,
            predicted_ma: p.current_ma,
            draws_more: measured_ma.is_some_and(|m| m > p.current_ma + EXCESS_THRESHOLD_MA),
        });
    }
    out
}

/// The comparison in words, one line per section.
pub fn render(checks: &[RailCheck]) -> String {
    let mut s = String::from("\nRails against the power budget (measured mean, predicted)\n");
    for c in checks {
        s += &format!(
            "  {:<6} {:<10} {:.3} V, predicted {:.3} V ({:+.0} mV)",
            c.section, c.rail, c.measured_v, c.predicted_v, c.difference_mv
        );
        match c.measured_ma {
            Some(m) if c.draws_more => {
                s += &format!(
                    "; draws about {m:.0} mA, {:.0} mA more than the predicted {:.0} mA",
                    m - c.predicted_ma,
                    c.predicted_ma
                );
            }
            Some(m) => {
                s += &format!(
                    "; draws about {m:.0} mA (predicted {:.0} mA)",
                    c.predicted_ma
                )
            }
            None => s += "; its current cannot be worked back (a rail next to it is not measured)",
        }
        s.push('\n');
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::budget::Library;
    use crate::power::{PowerPoint, SupplyData, solve};

    #[test]
    fn measured_rails_equal_to_the_prediction_give_back_the_predicted_currents() {
        let lib = Library::builtin();
        let d = Design::demo(&lib);
        let w = Wiring::of(&d).unwrap().unwrap();
        let pt = PowerPoint {
            freq_hz: 2e6,
            data_activity: 0.25,
            temp_c: 25.0,
        };
        let pb = solve(&d, &lib, &SupplyData::builtin(), &w, &pt);
        let measured: Vec<(String, f64)> = pb
            .sections
            .iter()
            .map(|s| (s.rail.clone().unwrap(), s.rail_v))
            .collect();
        let c = compare(&d, &w, &pb, &measured);
        assert_eq!(c.len(), 3);
        for x in &c {
            // the predicted rails were computed from currents at the last rails (1 nV apart)
            assert!(
                (x.measured_ma.unwrap() - x.predicted_ma).abs() < 1e-3,
                "{x:?}"
            );
            assert!(!x.draws_more);
        }
        // the far rail 40 mV lower: 40 mV over the far feed's resistance more on the far section,
        // and the mid section's worked-back current falls by as much
        let mut low = measured.clone();
        low[2].1 -= 0.040;
        let c = compare(&d, &w, &pb, &low);
        let extra = 40.0 / pb.sections[2].feed_ohm;
        assert!((c[2].measured_ma.unwrap() - pb.sections[2].current_ma - extra).abs() < 1e-3);
        assert!(c[2].draws_more);
        assert!(c[1].measured_ma.unwrap() < pb.sections[1].current_ma);
    }
}

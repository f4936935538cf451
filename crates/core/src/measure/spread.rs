//! A session whose clock moves (a sweep, a drifting RC clock, a turned potentiometer): whether
//! its frequency moved by more than the intervals' own uncertainty allows, the range it moved
//! over, and its jitter and TIE against the moving mean instead of against one clock.
//!
//! Detrending: the period jitter comes from the cycle-to-cycle differences, in which a trend
//! slow against one period cancels. For independent successive periods of RMS σ, adjacent
//! differences have RMS σ·√2; the quantisation of the two differences' three timestamps adds
//! q²/2 (uniform errors of variance q²/12 with weights 1, −2, 1), so
//! σ = √((c2c² − q²/2) / 2). The TIE is the one within records, each against its own fitted
//! clock (the clock figures' detrended records).

use serde::Serialize;

use super::clock::{ClockSnapshot, K};
use super::series::Series;

/// How a session's clock moved, and its figures against the moving mean.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct Movement {
    /// The frequency moved by more than the intervals' uncertainties allow: whole-window
    /// frequency, jitter and TIE describe a spread, not a property of one clock.
    pub moving: bool,
    /// Intervals with clock figures that were compared.
    pub intervals: usize,
    /// Reduced χ² of the interval frequencies against one constant frequency (≈ 1: steady).
    pub chi2_per_dof: Option<f64>,
    /// Lowest interval frequency, Hz.
    pub low_hz: Option<f64>,
    /// Highest interval frequency, Hz.
    pub high_hz: Option<f64>,
    /// Period jitter RMS against the moving mean (from cycle-to-cycle, de-biased for the
    /// quantisation), ns; None for a steady clock or without a cycle-to-cycle figure.
    pub period_jitter_detrended_ns: Option<f64>,
    /// Its uncertainty (k = 2.5), ns.
    pub period_jitter_detrended_uncertainty_ns: Option<f64>,
    /// The de-biased cycle-to-cycle variance does not exceed its own uncertainty: the jitter
    /// is below what this resolution shows.
    pub period_jitter_detrended_below_resolution: bool,
    /// TIE peak to peak within records, each against its own fitted clock, ns (moving only).
    pub tie_detrended_pkpk_ns: Option<f64>,
    /// Cycles per such record.
    pub tie_record_cycles: usize,
}

/// Reduced χ² of the interval frequencies against their weighted mean, and how many
/// intervals took part (None below three intervals with an uncertainty).
fn chi2(series: &Series) -> Option<(f64, usize)> {
    let pts: Vec<(f64, f64)> = series
        .clock_points()
        .filter_map(|p| {
            // the series states expanded uncertainties (k = 2.5): back to one standard deviation
            let u = p.frequency_uncertainty_hz? / K;
            (u > 0.0 && u.is_finite()).then_some((p.frequency_hz?, u))
        })
        .collect();
    if pts.len() < 3 {
        return None;
    }
    let w: f64 = pts.iter().map(|(_, u)| 1.0 / (u * u)).sum();
    let mean = pts.iter().map(|(f, u)| f / (u * u)).sum::<f64>() / w;
    let nu = (pts.len() - 1) as f64;
    let chi2 = pts
        .iter()
        .map(|(f, u)| ((f - mean) / u).powi(2))
        .sum::<f64>()
        / nu;
    Some((chi2, pts.len()))
}

/// Whether a reduced χ² over `n` intervals says the frequency moved: beyond four standard
/// deviations of χ²/ν for a steady clock (√(2/ν)).
fn moves(chi2_per_dof: f64, n: usize) -> bool {
    let nu = (n.max(2) - 1) as f64;
    chi2_per_dof > 1.0 + 4.0 * (2.0 / nu).sqrt()
}

/// Whether the series' interval frequencies say the clock moved.
pub fn series_moves(series: &Series) -> bool {
    chi2(series).is_some_and(|(c, n)| moves(c, n))
}

/// Period jitter against the moving mean from the cycle-to-cycle figure: (value, U, below
/// resolution). The variance of a sample variance over N differences is about 3σ⁴/N (2σ⁴/N
/// for independent values, × 1.5 for the −0.5 lag-one correlation of adjacent differences).
fn detrended_jitter(c: &ClockSnapshot) -> Option<(f64, f64, bool)> {
    let c2c = c.cycle_to_cycle_rms_ns?;
    let n = c.period_jitter_n.saturating_sub(1);
    if n < 2 || !c2c.is_finite() {
        return None;
    }
    let s2 = c2c * c2c;
    let floor2 = c.cycle_to_cycle_floor_ns * c.cycle_to_cycle_floor_ns;
    let u_s2 = K * s2 * (3.0 / n as f64).sqrt();
    let var = ((s2 - floor2) / 2.0).max(0.0);
    let sigma = var.sqrt();
    let below = s2 - floor2 <= u_s2;
    // U of σ from U of σ² (σ² = (s² − f²)/2): δσ = δσ² / (2σ), bounded by √(δσ²) near zero
    let u_var = u_s2 / 2.0;
    let u = if sigma > 0.0 {
        (u_var / (2.0 * sigma)).min(u_var.sqrt())
    } else {
        u_var.sqrt()
    };
    Some((sigma, u, below))
}

/// The movement of the clock `c` over the session's `series`.
pub fn movement(c: &ClockSnapshot, series: &Series) -> Movement {
    let stats = chi2(series);
    let freqs: Vec<f64> = series
        .clock_points()
        .filter_map(|p| p.frequency_hz)
        .collect();
    let low = freqs.iter().copied().fold(f64::INFINITY, f64::min);
    let high = freqs.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let moving = stats.is_some_and(|(x, n)| moves(x, n));
    // only a moving clock: its phase against the tick is spread by the movement, which the
    // quantisation term q²/2 assumes; a steady clock at a near-whole number of ticks is not
    // (its own figures and their floor apply)
    let jitter = detrended_jitter(c).filter(|_| moving);
    Movement {
        moving,
        intervals: stats.map_or(0, |s| s.1),
        chi2_per_dof: stats.map(|s| s.0),
        low_hz: low.is_finite().then_some(low),
        high_hz: high.is_finite().then_some(high),
        period_jitter_detrended_ns: jitter.map(|j| j.0),
        period_jitter_detrended_uncertainty_ns: jitter.map(|j| j.1),
        period_jitter_detrended_below_resolution: jitter.is_some_and(|j| j.2),
        tie_detrended_pkpk_ns: c.tie_pkpk_ns.filter(|_| moving),
        tie_record_cycles: c.tie_record_cycles,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Four standard deviations of χ²/ν (√(2/ν) for ν degrees of freedom: the χ² distribution's
    /// variance 2ν, a textbook property, from memory) decide.
    #[test]
    fn the_movement_rule() {
        assert!(!moves(1.0, 101));
        assert!(!moves(1.0 + 4.0 * (2.0f64 / 100.0).sqrt() - 1e-9, 101));
        assert!(moves(1.0 + 4.0 * (2.0f64 / 100.0).sqrt() + 1e-9, 101));
        assert!(!moves(f64::NAN, 101));
    }
}

//! Copper wire resistance by American Wire Gauge, corrected for temperature.
//!
//! The gauge's diameter is its definition in ASTM B258 (d = 0.005 in · 92^((36 − n)/39)); the
//! resistivity is the International Annealed Copper Standard, 1/58 Ω·mm²/m at 20 °C, and the
//! temperature coefficient 0.00393 per °C at 20 °C, both as NBS Handbook 100 (Copper Wire Tables,
//! 1966) §1.1 states them. Tests compare with that handbook's working table.

/// Resistivity of annealed copper at 20 °C, Ω·mm²/m (IACS, NBS Handbook 100 §1.1).
pub const IACS_OHM_MM2_PER_M: f64 = 1.0 / 58.0;
/// Temperature coefficient of resistance of annealed copper at 20 °C, per °C (NBS Handbook 100).
pub const ALPHA_20_PER_C: f64 = 0.00393;
/// Smallest and largest gauge accepted (solid hook-up and supply wire).
pub const GAUGES: std::ops::RangeInclusive<i32> = 0..=40;

/// The diameter of an AWG gauge, mm (ASTM B258).
pub fn awg_diameter_mm(gauge: i32) -> f64 {
    0.005 * 25.4 * 92f64.powf(f64::from(36 - gauge) / 39.0)
}

/// Resistance of one metre of solid annealed copper of a gauge at `temp_c`, Ω/m.
pub fn ohm_per_m(gauge: i32, temp_c: f64) -> f64 {
    let d = awg_diameter_mm(gauge);
    let area_mm2 = std::f64::consts::PI / 4.0 * d * d;
    IACS_OHM_MM2_PER_M / area_mm2 * (1.0 + ALPHA_20_PER_C * (temp_c - 20.0))
}

/// Read a gauge written "22 AWG", "22AWG", "AWG 22" or "22"; None when it is not one.
pub fn parse_gauge(text: &str) -> Option<i32> {
    let t = text.trim();
    let t = t
        .strip_suffix("AWG")
        .or_else(|| t.strip_prefix("AWG"))
        .unwrap_or(t)
        .trim();
    let n: i32 = t.parse().ok()?;
    GAUGES.contains(&n).then_some(n)
}

#[cfg(test)]
mod tests {
    use super::*;

    /// NBS Handbook 100 (Copper Wire Tables, 1966), working table, Ω per 1000 ft at 20 °C, as
    /// reproduced in a wire resistance table on cirris.com (values seen there; the handbook's own
    /// table from memory agrees).
    const HANDBOOK_OHM_PER_KFT: &[(i32, f64)] = &[
        (14, 2.525),
        (16, 4.016),
        (18, 6.385),
        (20, 10.15),
        (22, 16.14),
        (24, 25.67),
        (26, 40.81),
        (28, 64.90),
        (30, 103.2),
    ];

    #[test]
    fn resistance_per_gauge_matches_the_handbook_table() {
        for &(g, table) in HANDBOOK_OHM_PER_KFT {
            let ours = ohm_per_m(g, 20.0) * 304.8;
            let rel = (ours / table - 1.0).abs();
            assert!(rel < 1.5e-3, "AWG {g}: {ours:.4} Ω/kft vs table {table}");
        }
    }

    #[test]
    fn diameter_of_22_awg() {
        // ASTM B258 / NBS Handbook 100: 22 AWG is 25.35 mil (0.6438 mm)
        assert!((awg_diameter_mm(22) - 0.6438).abs() < 1e-3);
    }

    #[test]
    fn temperature_correction_uses_the_copper_coefficient() {
        // 0.00393 /°C at 20 °C (NBS Handbook 100): +30 °C → × 1.1179
        let r = ohm_per_m(22, 50.0) / ohm_per_m(22, 20.0);
        assert!((r - 1.1179).abs() < 1e-9, "{r}");
    }

    #[test]
    fn gauges_are_read_strictly() {
        assert_eq!(parse_gauge("22 AWG"), Some(22));
        assert_eq!(parse_gauge("AWG 24"), Some(24));
        assert_eq!(parse_gauge("22"), Some(22));
        assert_eq!(parse_gauge("22 awg"), None);
        assert_eq!(parse_gauge("57 AWG"), None);
        assert_eq!(parse_gauge("thin"), None);
    }
}

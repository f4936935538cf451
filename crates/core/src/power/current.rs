//! One part's supply current at a rail voltage, clock and temperature: static (quiescent, LS
//! package, memory) and dynamic (the CMOS relation P = Cpd·VCC²·fi·N + Σ CL·VCC²·fo, I = P/VCC).

use super::data::{Draw, DrawKind};

/// Share of the clock frequency at which an ordinary data signal toggles when nothing else is
/// given: a transition on half of the cycles is a square wave of f/4 (common practice, no source).
pub const DEFAULT_DATA_ACTIVITY: f64 = 0.25;
/// A clock input toggles at the clock's frequency.
pub const CLOCK_ACTIVITY: f64 = 1.0;
/// Load per output when the design gives none: breadboard wiring and an input or two (common
/// practice, no source).
pub const DEFAULT_LOAD_PF: f64 = 15.0;

/// The conditions one part's current is computed at.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Conditions {
    /// Rail voltage at the part.
    pub rail_v: f64,
    /// Clock frequency.
    pub freq_hz: f64,
    /// Data-signal activity (share of the clock frequency).
    pub data_activity: f64,
    /// Ambient temperature.
    pub temp_c: f64,
    /// HCT inputs held at TTL levels.
    pub hct_inputs_at_ttl: bool,
}

/// A part's current, split as the report shows it.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct PartCurrent {
    /// Not depending on the clock: quiescent, LS package current, a memory's active current.
    pub static_ma: f64,
    /// Growing with the clock (CMOS switching).
    pub dynamic_ma: f64,
    /// True when the temperature is beyond every quiescent-current column.
    pub beyond_columns: bool,
}

/// Dynamic current of a CMOS part from the data-sheet relation, mA: (Cpd·N·fi + Σ CL·fo)·VCC.
pub fn cmos_dynamic_ma(
    cpd_pf: f64,
    n_inputs: f64,
    fi_hz: f64,
    cl_pf: f64,
    n_outputs: f64,
    fo_hz: f64,
    vcc_v: f64,
) -> f64 {
    (cpd_pf * n_inputs * fi_hz + cl_pf * n_outputs * fo_hz) * vcc_v * 1e-9
}

/// The current of one part. `clocked`: its clock input runs at the clock (its units switch at
/// f); otherwise its inputs switch at the data activity. `load_pf`: per output.
pub fn part_current(d: &Draw, clocked: bool, load_pf: f64, c: &Conditions) -> PartCurrent {
    match d.kind {
        DrawKind::Cmos => {
            let (icc_ua, beyond) = d.icc_ua.at(c.temp_c).unwrap_or((0.0, false));
            let ttl = if c.hct_inputs_at_ttl {
                d.delta_icc_ua
            } else {
                0.0
            };
            let fi = c.freq_hz
                * if clocked {
                    CLOCK_ACTIVITY
                } else {
                    c.data_activity
                };
            let fo = c.freq_hz * c.data_activity;
            PartCurrent {
                static_ma: (icc_ua + ttl) * 1e-3,
                dynamic_ma: cmos_dynamic_ma(
                    d.cpd_pf,
                    f64::from(d.units),
                    fi,
                    load_pf,
                    f64::from(d.outputs),
                    fo,
                    c.rail_v,
                ),
                beyond_columns: beyond,
            }
        }
        DrawKind::Ttl => PartCurrent {
            static_ma: 0.5 * (d.icch_ma + d.iccl_ma),
            ..PartCurrent::default()
        },
        DrawKind::Memory => PartCurrent {
            static_ma: d.active_ma,
            ..PartCurrent::default()
        },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::budget::library::Status;
    use crate::power::data::IccColumns;

    fn draw(kind: DrawKind) -> Draw {
        Draw {
            kind,
            cpd_pf: 30.0,
            units: 8,
            outputs: 8,
            icc_ua: IccColumns(vec![(25.0, 8.0), (85.0, 80.0)]),
            delta_icc_ua: 0.0,
            icch_ma: 2.4,
            iccl_ma: 6.6,
            active_ma: 50.0,
            standby_ma: 0.2,
            source: String::new(),
            status: Status::Seen,
            family_default: false,
        }
    }

    fn at(f: f64) -> Conditions {
        Conditions {
            rail_v: 5.0,
            freq_hz: f,
            data_activity: 0.25,
            temp_c: 25.0,
            hct_inputs_at_ttl: false,
        }
    }

    #[test]
    fn cmos_relation_against_the_74hc04_worked_example() {
        // docs/REFERENCES.md §2: 74HC04 gate, CPD 21 pF (NXP 74HC04-Q100), CL 50 pF, 5 V, 1 MHz
        // in and out → PD = 21·25·1 + 50·25·1 = 1775 µW, so I = 1775 µW / 5 V = 355 µA
        let i = cmos_dynamic_ma(21.0, 1.0, 1e6, 50.0, 1.0, 1e6, 5.0);
        assert!((i * 5.0 * 1e3 - 1775.0).abs() < 1e-9, "{i}");
    }

    #[test]
    fn cmos_relation_in_the_data_sheet_units() {
        // NXP 74HC245 Rev. 03, table 9 note 1: PD in µW = CPD × VCC² × fi × N + Σ(CL × VCC² × fo)
        // with pF, V and MHz. CPD 30 pF, VCC 5 V, fi 1 MHz, N = 1, CL 50 pF, fo 0.5 MHz:
        // 30·25·1 + 50·25·0.5 = 750 + 625 = 1375 µW; I = P / VCC = 275 µA.
        let i = cmos_dynamic_ma(30.0, 1.0, 1e6, 50.0, 1.0, 0.5e6, 5.0);
        assert!((i - 0.275).abs() < 1e-12, "{i}");
    }

    #[test]
    fn hc_current_grows_linearly_with_frequency_and_ls_does_not() {
        let hc = draw(DrawKind::Cmos);
        let ls = draw(DrawKind::Ttl);
        let c = |d: &Draw, f| {
            let p = part_current(d, true, 15.0, &at(f));
            p.static_ma + p.dynamic_ma
        };
        let (a, b, d) = (c(&hc, 1e6), c(&hc, 2e6), c(&hc, 4e6));
        // linear: equal steps for equal frequency steps, and above the static current
        assert!(((b - a) * 2.0 - (d - b)).abs() < 1e-12);
        assert!(b - a > 0.1);
        // LS: the data sheet's package current, the mean of outputs high and low (2.4 / 6.6 mA)
        assert_eq!(c(&ls, 1e6), 4.5);
        assert_eq!(c(&ls, 4e6), 4.5);
    }

    #[test]
    fn quiescent_current_by_temperature_column() {
        let hc = draw(DrawKind::Cmos);
        let mut hot = at(0.0);
        hot.temp_c = 70.0;
        assert_eq!(part_current(&hc, false, 0.0, &hot).static_ma, 0.08);
        hot.temp_c = 100.0;
        assert!(part_current(&hc, false, 0.0, &hot).beyond_columns);
    }
}

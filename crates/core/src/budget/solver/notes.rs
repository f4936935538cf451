//! What a budget must be read with: parts outside their data sheets' ranges or columns, typical
//! values missing or following the guaranteed row, loads not modelled, and the voltage model of
//! each family used. Each warning is said once.

use std::collections::BTreeSet;

use super::evaluate::Evaluator;
use super::types::{ClockInput, ModelNote, OperatingPoint};
use crate::budget::derate::{self, Conditions, Corner, Notes};
use crate::budget::design::model::Design;
use crate::budget::library::model::{ArcKind, DeratingKind, Library};
use crate::units;

/// What the warnings found: in spec, guaranteed, the sentences, and the parts responsible.
pub(super) struct Findings {
    /// Every part inside its data sheet's ranges and columns.
    pub in_spec: bool,
    /// Every value covered by a data-sheet column.
    pub guaranteed: bool,
    /// One sentence each.
    pub warnings: Vec<String>,
    /// "U3 74HC283" for each part outside its data sheet's supply or temperature range.
    pub out_of_spec_parts: Vec<String>,
    /// "U3 74HC283" for each part with a value no data-sheet column covers.
    pub not_guaranteed_parts: Vec<String>,
}

/// The warnings: the design's own first, then one sentence per condition and part (or arc),
/// then the budget-wide ones.
pub(super) fn warnings(
    design: &Design,
    lib: &Library,
    ev: &Evaluator,
    op: &OperatingPoint,
) -> Findings {
    let mut f = Findings {
        in_spec: true,
        guaranteed: true,
        warnings: design.warnings.clone(),
        out_of_spec_parts: Vec::new(),
        not_guaranteed_parts: Vec::new(),
    };
    let mut seen = BTreeSet::new();
    let blame = |list: &mut Vec<String>, who: String| {
        if !list.contains(&who) {
            list.push(who);
        }
    };
    for &(key, bits) in &ev.notes {
        let (instance, arc) = (key / 4096, key % 4096);
        let inst = &design.instances[instance];
        let part = &lib.parts[inst.part];
        let fam = &lib.families[part.family];
        let c = ev.conditions(instance);
        let notes = Notes(bits);
        let who = format!("{} {}", inst.reference, part.type_name);
        let a = &part.arcs[arc];
        if notes.out_of_spec() {
            f.in_spec = false;
            blame(&mut f.out_of_spec_parts, who.clone());
        }
        if notes.has(Notes::VCC_OUT_OF_SPEC) && seen.insert((inst.reference.clone(), 1, 0)) {
            f.warnings.push(format!(
                "OUT OF SPEC: {who} at {:.3} V is outside the {} range {}–{} V",
                c.vcc_v, fam.name, fam.vcc_min_v, fam.vcc_max_v
            ));
        }
        if notes.has(Notes::TEMP_OUT_OF_SPEC) && seen.insert((inst.reference.clone(), 2, 0)) {
            f.warnings.push(format!(
                "OUT OF SPEC: {who} at {} °C is outside its rating {}…{} °C",
                c.temp_c, part.temp_min_c, part.temp_max_c
            ));
        }
        if notes.has(Notes::VCC_NOT_COVERED) {
            f.in_spec = false;
            f.guaranteed = false;
            blame(&mut f.not_guaranteed_parts, who.clone());
            if seen.insert((inst.reference.clone(), 3, 0)) {
                let whose = if part.is_generic() {
                    format!(
                        "the data sheet of {} has",
                        uncovered_variants(lib, inst.part, arc, &c).join(", ")
                    )
                } else {
                    "its data sheet has".to_string()
                };
                f.warnings.push(format!(
                    "NOT GUARANTEED: {who} at {:.3} V: {whose} no column at or below this supply; the values are extrapolated from the lowest column",
                    c.vcc_v
                ));
            }
        }
        if notes.has(Notes::TEMP_NOT_COVERED) {
            f.in_spec = false;
            f.guaranteed = false;
            blame(&mut f.not_guaranteed_parts, who.clone());
        }
        if notes.has(Notes::TEMP_NOT_COVERED) && seen.insert((part.type_name.clone(), 4, arc)) {
            f.warnings.push(format!(
                "NOT GUARANTEED: {who} {} at {} °C: no data-sheet column covers this temperature; the nearest column is used",
                a.name, c.temp_c
            ));
        }
        if notes.has(Notes::TYP_FROM_MAX)
            && a.kind == ArcKind::Delay
            && seen.insert((part.type_name.clone(), 5, arc))
        {
            f.warnings.push(format!(
                "{} {}: no typical value in the data sheet; the guaranteed value is used",
                part.type_name, a.name
            ));
        }
        if notes.has(Notes::TYP_FOLLOWS_MAX) && seen.insert((part.type_name.clone(), 6, arc)) {
            f.warnings.push(format!(
                "{} {}: the data sheet gives one typical value; it follows the guaranteed row's shape (the same ratio to it at every supply and temperature)",
                part.type_name, a.name
            ));
        }
        if notes.has(Notes::LOAD_NOT_MODELLED) && seen.insert((inst.reference.clone(), 7, 0)) {
            f.warnings.push(format!(
                "{who}: load {} is not modelled for {} (no data sheet with two load columns): the data sheet's load is used",
                inst.load_pf.map_or(String::new(), |l| format!("{l} pF")),
                fam.name
            ));
        }
    }
    if ev.all_notes.has(Notes::BETWEEN_COLUMNS) {
        f.warnings.push(
            "between two data-sheet supply columns the guaranteed value is the lower supply's column (nothing between columns is guaranteed); the estimate beside it lies between the two".to_string(),
        );
    }
    if op.temp_c < 25.0 && f.guaranteed {
        f.warnings.push(
            "below 25 °C the column that covers the temperature (e.g. −40…85 °C) is guaranteed; the estimate uses the 25 °C column".to_string(),
        );
    }
    f
}

/// The variants of a generic part whose arc no column covers at these conditions.
fn uncovered_variants(lib: &Library, part: usize, arc: usize, c: &Conditions) -> Vec<String> {
    let a = &lib.parts[part].arcs[arc];
    a.variants
        .iter()
        .filter(|&&(p, i)| derate::eval(lib, p, i, Corner::Max, c).notes.not_covered())
        .map(|&(p, _)| lib.parts[p].type_name.clone())
        .collect()
}

/// A note when the clock asked for is far from anything the design could mean: much slower or
/// faster than f_max, as when a prefix was mistyped ("1.8mHz" is millihertz).
pub(super) fn plausibility(clock: &ClockInput, fmax_hz: f64) -> Option<String> {
    let f = clock.freq_hz;
    let ratio = fmax_hz / f;
    if ratio > 1e4 {
        let hint = if f < 1.0 {
            format!(
                " SI prefixes are case-sensitive (m = milli, M = mega): did you mean {}?",
                units::hz(f * 1e9)
            )
        } else {
            String::new()
        };
        Some(format!(
            "the clock asked for, {}, is {ratio:.1e} times slower than this design's f_max ({}): is that the clock you meant?{hint}",
            units::hz(f),
            units::hz(fmax_hz)
        ))
    } else if ratio < 1e-2 {
        Some(format!(
            "the clock asked for, {}, is over 100 times this design's f_max ({}): is that the clock you meant?",
            units::hz(f),
            units::hz(fmax_hz)
        ))
    } else {
        None
    }
}

/// The voltage model of each family the design uses, in library order.
pub(super) fn models(design: &Design, lib: &Library) -> Vec<ModelNote> {
    let families: BTreeSet<usize> = design
        .instances
        .iter()
        .map(|inst| lib.parts[inst.part].family)
        .collect();
    families
        .into_iter()
        .map(|fi| {
            let f = &lib.families[fi];
            match (&f.derating, &f.shape) {
                (DeratingKind::AlphaPower, Some(s)) => ModelNote {
                    family: f.name.clone(),
                    model: format!(
                        "estimate: alpha-power law t = k·V/(V - {:.2} V)^{:.2}, fitted on {} rows of {} ({} rows that do not follow it left out of the fit, not of the error figures)",
                        s.vt_v, s.alpha, s.rows, s.fitted_on, s.excluded
                    ),
                    fit_rms_pct: Some(s.rms_pct),
                    fit_max_pct: Some(s.max_pct),
                    estimate_between: Some(s.cv_between),
                    estimate_above: Some(s.cv_above),
                    estimate_below: Some(s.cv_below),
                },
                _ => ModelNote {
                    family: f.name.clone(),
                    model: format!(
                        "not derated by supply: one data-sheet column, valid {}–{} V",
                        f.vcc_min_v, f.vcc_max_v
                    ),
                    fit_rms_pct: None,
                    fit_max_pct: None,
                    estimate_between: None,
                    estimate_above: None,
                    estimate_below: None,
                },
            }
        })
        .collect()
}

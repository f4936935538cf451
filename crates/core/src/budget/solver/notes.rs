//! What a budget must be read with: parts outside their data sheets' ranges, columns used beyond
//! their temperature, typical values missing, and the voltage model of each family used.

use std::collections::BTreeSet;

use super::evaluate::Evaluator;
use super::types::{ModelNote, OperatingPoint};
use crate::budget::derate::Notes;
use crate::budget::design::model::Design;
use crate::budget::library::model::{DeratingKind, Library};

/// Whether every part ran inside its data sheet, and the warnings: the design's own first, then
/// one sentence per condition and part (or arc).
pub(super) fn warnings(
    design: &Design,
    lib: &Library,
    ev: &Evaluator,
    op: &OperatingPoint,
) -> (bool, Vec<String>) {
    let mut warnings = design.warnings.clone();
    let mut in_spec = true;
    let mut seen = BTreeSet::new();
    for &(key, bits) in &ev.notes {
        let (instance, arc) = (key / 4096, key % 4096);
        let inst = &design.instances[instance];
        let part = &lib.parts[inst.part];
        let fam = &lib.families[part.family];
        let c = ev.conditions(instance);
        let notes = Notes(bits);
        if notes.has(Notes::VCC_OUT_OF_SPEC) && seen.insert((inst.reference.clone(), 1)) {
            in_spec = false;
            warnings.push(format!(
                "OUT OF SPEC: {} ({}) at {:.3} V is outside the {} range {}–{} V; its delays are extrapolated beyond the data sheet",
                inst.reference, part.type_name, c.vcc_v, fam.name, fam.vcc_min_v, fam.vcc_max_v
            ));
        }
        if notes.has(Notes::TEMP_OUT_OF_SPEC) && seen.insert((inst.reference.clone(), 2)) {
            in_spec = false;
            warnings.push(format!(
                "OUT OF SPEC: {} ({}) at {} °C is outside the {} rating {}…{} °C",
                inst.reference, part.type_name, c.temp_c, fam.name, fam.temp_min_c, fam.temp_max_c
            ));
        }
        if notes.has(Notes::ABOVE_LAST_COLUMN) {
            let a = &part.arcs[arc];
            let last = a.worst.last().map_or(0.0, |c| c.temp_c);
            warnings.push(format!(
                "{} {} {}: the data sheet has no column above {last} °C; that column's values are used at {} °C",
                inst.reference, part.type_name, a.name, c.temp_c
            ));
        }
        if notes.has(Notes::TYP_FROM_MAX) && seen.insert((format!("{}{}", inst.reference, arc), 3))
        {
            warnings.push(format!(
                "{} {} {}: no typical value in the data sheet; the guaranteed value is used",
                inst.reference, part.type_name, part.arcs[arc].name
            ));
        }
    }
    if op.temp_c < 25.0 {
        warnings.push(
            "below 25 °C the 25 °C columns are used (CMOS is faster when cold; the data sheets guarantee the −40…85 °C column there: use --temp 85 for a strict bound)".to_string(),
        );
    }
    (in_spec, warnings)
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
                        "alpha-power law t = k·V/(V − {:.2} V)^{:.2}, fitted on {} rows of {} ({} outlier rows left out)",
                        s.vt_v, s.alpha, s.rows, s.fitted_on, s.excluded
                    ),
                    fit_rms_pct: Some(s.rms_pct),
                    fit_max_pct: Some(s.max_pct),
                },
                _ => ModelNote {
                    family: f.name.clone(),
                    model: format!(
                        "not derated by supply: one data-sheet column, valid {}–{} V",
                        f.vcc_min_v, f.vcc_max_v
                    ),
                    fit_rms_pct: None,
                    fit_max_pct: None,
                },
            }
        })
        .collect()
}

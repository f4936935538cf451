//! Derating: a part's delay at any supply voltage, temperature and load, from its data-sheet columns.
//!
//! Voltage: the alpha-power law t = k·V/(V − Vt)^α (Sakurai & Newton, IEEE JSSC 25(2), 1990) with
//! α and Vt fitted once per family over every multi-column row of its parts, k per row (the fit
//! runs when the library is loaded, in `library::fit`). Between a row's own columns the model's
//! log-error is interpolated, so each data-sheet column is reproduced exactly and the model only
//! shapes the curve between and beyond them. Its fit error is reported.
//! Temperature: linear between the data sheet's temperature columns, exact at each column.
//!
//! Pure maths over the library model: nothing here reads or fits a library.

use serde::{Deserialize, Serialize};

use super::library::model::{ArcKind, Column, DeratingKind, Family, Library, Series, Shape};

/// The shape fit, kept at this path for callers that fit rows of their own.
pub use super::library::fit::{error_of, fit_shape};

/// Which column of the data sheet a delay is read from.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize, Deserialize, Hash, PartialOrd, Ord)]
#[serde(rename_all = "lowercase")]
pub enum Corner {
    /// Guaranteed minimum (contamination) delay; unknown when the data sheet gives none.
    Min,
    /// Typical.
    Typ,
    /// Guaranteed maximum.
    Max,
}

impl std::fmt::Display for Corner {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str(match self {
            Corner::Min => "min",
            Corner::Typ => "typ",
            Corner::Max => "max",
        })
    }
}

/// Conditions an arc is evaluated at.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Conditions {
    /// Supply at the part.
    pub vcc_v: f64,
    /// Ambient temperature.
    pub temp_c: f64,
    /// Load on the output; the data sheet's load when `None`.
    pub load_pf: Option<f64>,
}

/// Things a derated value must be read with; a small bit set so the solver's hot loop stays cheap.
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Hash)]
pub struct Notes(pub u16);

impl Notes {
    /// Supply outside the family's specified range: extrapolated, out of specification.
    pub const VCC_OUT_OF_SPEC: Notes = Notes(1);
    /// Temperature outside the family's rated range.
    pub const TEMP_OUT_OF_SPEC: Notes = Notes(2);
    /// Hotter than the last temperature column: that column was used.
    pub const ABOVE_LAST_COLUMN: Notes = Notes(4);
    /// Colder than the first temperature column: that column was used.
    pub const BELOW_FIRST_COLUMN: Notes = Notes(8);
    /// No typical value: the guaranteed value was used.
    pub const TYP_FROM_MAX: Notes = Notes(16);
    /// One supply column only: not derated for voltage.
    pub const NOT_DERATED: Notes = Notes(32);
    /// No guaranteed minimum: counted as 0 ns.
    pub const MIN_UNKNOWN: Notes = Notes(64);

    /// Whether every bit of `other` is set.
    pub fn has(self, other: Notes) -> bool {
        self.0 & other.0 == other.0 && other.0 != 0
    }
    /// Union.
    pub fn with(self, other: Notes) -> Notes {
        Notes(self.0 | other.0)
    }
    /// Whether the value lies outside the data sheet's specification.
    pub fn out_of_spec(self) -> bool {
        self.0 & (Self::VCC_OUT_OF_SPEC.0 | Self::TEMP_OUT_OF_SPEC.0) != 0
    }
}

/// A derated value in ns (`None`: unknown) with its notes.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Value {
    /// Nanoseconds.
    pub ns: Option<f64>,
    /// Caveats.
    pub notes: Notes,
}

/// Piecewise-linear interpolation of `ys` over ascending `xs`, clamped at both ends.
fn interp(xs: &[f64], ys: &[f64], x: f64) -> f64 {
    match xs.len() {
        0 => 0.0,
        1 => ys[0],
        n => {
            if x <= xs[0] {
                return ys[0];
            }
            if x >= xs[n - 1] {
                return ys[n - 1];
            }
            let i = xs.partition_point(|&v| v <= x).clamp(1, n - 1);
            let t = (x - xs[i - 1]) / (xs[i] - xs[i - 1]);
            ys[i - 1] + t * (ys[i] - ys[i - 1])
        }
    }
}

/// Value of one row at a supply voltage.
fn eval_series(series: &Series, shape: Option<&Shape>, vcc_v: f64) -> f64 {
    match shape {
        Some(s) if series.follows_model() => {
            let r = interp(&series.vcc_v, &series.resid, vcc_v);
            (series.ln_k + s.ln_g(vcc_v) + r).exp()
        }
        _ => interp(&series.vcc_v, &series.ns, vcc_v),
    }
}

/// The model's correction near `vcc_v` in %: the larger |error| of the two columns around it
/// (the nearest column outside the row), or the family's RMS error for one-column rows.
pub(crate) fn row_error_pct(series: &Series, shape: Option<&Shape>, vcc_v: f64) -> Option<f64> {
    let s = shape?;
    if series.vcc_v.len() < 2 {
        return Some(s.rms_pct);
    }
    if !series.follows_model() {
        return None;
    }
    let n = series.vcc_v.len();
    let i = series.vcc_v.partition_point(|&v| v <= vcc_v);
    let (a, b) = match i {
        0 => (0, 0),
        i if i >= n => (n - 1, n - 1),
        i => (i - 1, i),
    };
    let err = |k: usize| (series.resid[k].exp() - 1.0).abs() * 100.0;
    Some(err(a).max(err(b)))
}

fn over_temperature(cols: &[Column], shape: Option<&Shape>, c: &Conditions) -> (f64, Notes) {
    let first = &cols[0];
    let last = &cols[cols.len() - 1];
    if c.temp_c <= first.temp_c {
        let n = if c.temp_c < first.temp_c {
            Notes::BELOW_FIRST_COLUMN
        } else {
            Notes::default()
        };
        return (eval_series(&first.series, shape, c.vcc_v), n);
    }
    if c.temp_c >= last.temp_c {
        let n = if c.temp_c > last.temp_c {
            Notes::ABOVE_LAST_COLUMN
        } else {
            Notes::default()
        };
        return (eval_series(&last.series, shape, c.vcc_v), n);
    }
    let i = cols.partition_point(|col| col.temp_c <= c.temp_c);
    let (a, b) = (&cols[i - 1], &cols[i]);
    let ta = eval_series(&a.series, shape, c.vcc_v);
    let tb = eval_series(&b.series, shape, c.vcc_v);
    let t = (c.temp_c - a.temp_c) / (b.temp_c - a.temp_c);
    (ta + t * (tb - ta), Notes::default())
}

/// Notes on the conditions themselves: outside the family's ranges, or not derated for supply.
fn range_notes(fam: &Family, worst: &Series, c: &Conditions) -> Notes {
    let mut notes = Notes::default();
    if c.vcc_v < fam.vcc_min_v - 1e-9 || c.vcc_v > fam.vcc_max_v + 1e-9 {
        notes = notes.with(Notes::VCC_OUT_OF_SPEC);
    }
    if c.temp_c < fam.temp_min_c || c.temp_c > fam.temp_max_c {
        notes = notes.with(Notes::TEMP_OUT_OF_SPEC);
    }
    if fam.derating == DeratingKind::None
        && worst.vcc_v.len() == 1
        && (c.vcc_v - worst.vcc_v[0]).abs() > 1e-9
    {
        notes = notes.with(Notes::NOT_DERATED);
    }
    notes
}

/// A part's arc at a corner and conditions.
pub fn eval(lib: &Library, part: usize, arc: usize, corner: Corner, c: &Conditions) -> Value {
    let p = &lib.parts[part];
    let a = &p.arcs[arc];
    let fam = &lib.families[p.family];
    let shape = fam.shape.as_ref();
    let mut notes = range_notes(fam, &a.worst[0].series, c);
    let load_pf = c.load_pf.unwrap_or(p.load_pf);
    // extra delay for load beyond the row's own, scaled from 4.5 V like the delays themselves
    let load_extra = |series: &Series| -> f64 {
        if a.kind != ArcKind::Delay || fam.load_ns_per_pf == 0.0 {
            return 0.0;
        }
        let scale = shape.map_or(1.0, |s| (s.ln_g(c.vcc_v) - s.ln_g(4.5)).exp());
        (load_pf - series.load_pf) * fam.load_ns_per_pf * scale
    };
    let (worst_ns, tn) = over_temperature(&a.worst, shape, c);
    notes = notes.with(tn);
    let ns = match corner {
        Corner::Max => Some(worst_ns + load_extra(&a.worst[0].series)),
        Corner::Typ => match &a.typ {
            Some(typ) => {
                // typical rows are given at 25 °C: scale by the guaranteed rows' temperature ratio
                let at_first = eval_series(&a.worst[0].series, shape, c.vcc_v);
                let ratio = if at_first > 0.0 {
                    worst_ns / at_first
                } else {
                    1.0
                };
                Some(eval_series(typ, shape, c.vcc_v) * ratio + load_extra(typ))
            }
            None => {
                notes = notes.with(Notes::TYP_FROM_MAX);
                Some(worst_ns + load_extra(&a.worst[0].series))
            }
        },
        Corner::Min => {
            if a.min.is_empty() {
                notes = notes.with(Notes::MIN_UNKNOWN);
                None
            } else {
                let (m, _) = over_temperature(&a.min, shape, c);
                Some(m + load_extra(&a.min[0].series))
            }
        }
    };
    Value {
        ns: ns.map(|v| v.max(0.0)),
        notes,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::budget::library::model::Library;

    fn at(
        lib: &Library,
        part: &str,
        arc: &str,
        kind: ArcKind,
        corner: Corner,
        v: f64,
        t: f64,
    ) -> Value {
        let p = lib.part_index(part).unwrap();
        let a = lib.parts[p].arc(arc, kind).unwrap();
        eval(
            lib,
            p,
            a,
            corner,
            &Conditions {
                vcc_v: v,
                temp_c: t,
                load_pf: None,
            },
        )
    }

    #[test]
    fn interpolation_clamps_and_hits_points() {
        let xs = [2.0, 4.5, 6.0];
        let ys = [1.0, 2.0, 4.0];
        assert_eq!(interp(&xs, &ys, 1.0), 1.0);
        assert_eq!(interp(&xs, &ys, 4.5), 2.0);
        assert_eq!(interp(&xs, &ys, 5.25), 3.0);
        assert_eq!(interp(&xs, &ys, 9.0), 4.0);
    }

    #[test]
    fn delay_falls_as_supply_rises() {
        let lib = Library::builtin();
        let mut last = f64::INFINITY;
        for i in 0..=40 {
            let v = 2.0 + 0.1 * i as f64;
            let d = at(&lib, "74HC04", "A->Y", ArcKind::Delay, Corner::Max, v, 25.0)
                .ns
                .unwrap();
            assert!(d < last, "not monotonic at {v} V");
            last = d;
        }
    }

    #[test]
    fn out_of_range_supply_is_flagged_not_hidden() {
        let lib = Library::builtin();
        let v = at(
            &lib,
            "74HCT245",
            "A->B",
            ArcKind::Delay,
            Corner::Max,
            4.2,
            25.0,
        );
        assert!(v.notes.has(Notes::VCC_OUT_OF_SPEC));
        let ok = at(
            &lib,
            "74HCT245",
            "A->B",
            ArcKind::Delay,
            Corner::Max,
            4.8,
            25.0,
        );
        assert!(!ok.notes.out_of_spec());
    }

    #[test]
    fn unknown_min_is_reported() {
        let lib = Library::builtin();
        let v = at(
            &lib,
            "74HC574",
            "CLK->Q",
            ArcKind::Delay,
            Corner::Min,
            5.0,
            25.0,
        );
        assert_eq!(v.ns, None);
        assert!(v.notes.has(Notes::MIN_UNKNOWN));
    }

    #[test]
    fn extra_load_adds_delay() {
        let lib = Library::builtin();
        let p = lib.part_index("74HC04").unwrap();
        let c = |load| Conditions {
            vcc_v: 4.5,
            temp_c: 25.0,
            load_pf: load,
        };
        let base = eval(&lib, p, 0, Corner::Max, &c(None)).ns.unwrap();
        let heavy = eval(&lib, p, 0, Corner::Max, &c(Some(150.0))).ns.unwrap();
        assert!((heavy - base - 100.0 * 0.06).abs() < 1e-9, "{base} {heavy}");
    }
}

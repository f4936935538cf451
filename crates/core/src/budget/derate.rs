//! Derating: a part's arc at any supply voltage, temperature and load, as two numbers.
//!
//! The **guaranteed** value is never below a data-sheet value that applies: between two supply
//! columns it is the lower supply's column (the slower neighbour), between temperature columns
//! the hotter one, the tightest column whose range covers the temperature; each row is first
//! made monotone without passing any published value. Where no column covers the conditions
//! (below the lowest supply column, hotter than the last column, colder than a 25 °C-only
//! table) the value is flagged as not guaranteed, never silently extrapolated.
//!
//! The **estimate** is the alpha-power law t = k·V/(V − Vt)^α (Sakurai & Newton, IEEE JSSC
//! 25(2), 1990), α and Vt fitted per family (`library::fit`): between two columns the row is
//! interpolated along the law, so each column is met exactly; beyond them it follows the law.
//! Its error is the family's leave-one-column-out figure (`Shape::cv_between`, `cv_outside`).
//!
//! Typical rows are at 25 °C; a typical row with one supply column follows its part's
//! guaranteed row (the same ratio to it at every supply and temperature).
//!
//! Pure maths over the library model: nothing here reads or fits a library.

use serde::{Deserialize, Serialize};

use super::library::model::{
    ArcKind, Bound, Column, DeratingKind, Family, Library, Part, Series, Shape, TimingArc,
};

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
    /// Supply outside the family's specified range.
    pub const VCC_OUT_OF_SPEC: Notes = Notes(1);
    /// Temperature outside the part's rated range.
    pub const TEMP_OUT_OF_SPEC: Notes = Notes(2);
    /// No data-sheet column at or below this supply (at or above it, for a minimum): the value
    /// is the model's extrapolation from the outermost column, not a guarantee.
    pub const VCC_NOT_COVERED: Notes = Notes(4);
    /// No data-sheet column covers this temperature: the nearest column is used, not a guarantee.
    pub const TEMP_NOT_COVERED: Notes = Notes(8);
    /// No typical value: the guaranteed value was used.
    pub const TYP_FROM_MAX: Notes = Notes(16);
    /// One supply column only: not derated for voltage.
    pub const NOT_DERATED: Notes = Notes(32);
    /// No guaranteed minimum: counted as 0 ns.
    pub const MIN_UNKNOWN: Notes = Notes(64);
    /// A typical value given at one supply follows the guaranteed row's shape.
    pub const TYP_FOLLOWS_MAX: Notes = Notes(128);
    /// A load other than the data sheet's was given, and the family has no load model.
    pub const LOAD_NOT_MODELLED: Notes = Notes(256);
    /// The supply lies between two data-sheet columns: the guaranteed value is the lower
    /// supply's column, the estimate lies between the two.
    pub const BETWEEN_COLUMNS: Notes = Notes(512);

    /// Whether every bit of `other` is set.
    pub fn has(self, other: Notes) -> bool {
        self.0 & other.0 == other.0 && other.0 != 0
    }
    /// Union.
    pub fn with(self, other: Notes) -> Notes {
        Notes(self.0 | other.0)
    }
    /// Whether the conditions lie outside the data sheet's operating ranges.
    pub fn out_of_spec(self) -> bool {
        self.0 & (Self::VCC_OUT_OF_SPEC.0 | Self::TEMP_OUT_OF_SPEC.0) != 0
    }
    /// Whether no data-sheet column covers the conditions (the value is not a guarantee).
    pub fn not_covered(self) -> bool {
        self.0 & (Self::VCC_NOT_COVERED.0 | Self::TEMP_NOT_COVERED.0) != 0
    }
}

/// A derated value: the guaranteed-rule value and the model estimate, in ns (`None`: unknown).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Value {
    /// By the guaranteed rule (for the typical corner: typical values placed by the same rule).
    pub ns: Option<f64>,
    /// The model estimate.
    pub est_ns: Option<f64>,
    /// The estimate's error range from leaving columns out, % (low, high); `None` when every
    /// value used sits on a data-sheet column (the estimate is the published value).
    pub est_err_pct: Option<(f64, f64)>,
    /// Caveats.
    pub notes: Notes,
}

/// Where an estimate came from: on a column (exact), between two, above the highest or below
/// the lowest (ordered by how far the estimate reaches).
#[derive(Clone, Copy, PartialEq, Eq, PartialOrd, Ord)]
enum Place {
    OnColumn,
    Between,
    Above,
    Below,
}

/// One row's two numbers at a supply.
struct RowAt {
    bound: f64,
    est: f64,
    covered: bool,
    place: Place,
}

fn row_at(s: &Series, shape: Option<&Shape>, vcc_v: f64) -> RowAt {
    let (bound, covered) = s.bound_at(shape, vcc_v);
    let place = if s.on_column(vcc_v) {
        Place::OnColumn
    } else if s.inside(vcc_v) {
        Place::Between
    } else if vcc_v > s.vcc_v[0] {
        Place::Above
    } else {
        Place::Below
    };
    RowAt {
        bound,
        est: s.estimate(shape, vcc_v),
        covered,
        place,
    }
}

/// A set of temperature columns at conditions: both numbers, notes and the estimate's place.
struct TempAt {
    bound: f64,
    est: f64,
    notes: Notes,
    place: Place,
}

/// The columns at a supply, made monotone across temperature without passing any published
/// value, then: guaranteed = the tightest column covering the temperature; estimate = linear in
/// temperature between the columns' upper temperatures, held at the ends.
fn over_temperature(cols: &[Column], shape: Option<&Shape>, c: &Conditions) -> TempAt {
    let bound_kind = cols[0].series.bound;
    let mut at: Vec<RowAt> = cols
        .iter()
        .map(|col| row_at(&col.series, shape, c.vcc_v))
        .collect();
    // monotone in temperature: an upper bound never falls as it gets hotter, a lower bound
    // never rises as it gets colder
    match bound_kind {
        Bound::Upper => {
            for i in 1..at.len() {
                at[i].bound = at[i].bound.max(at[i - 1].bound);
                at[i].est = at[i].est.max(at[i - 1].est);
            }
        }
        Bound::Lower => {
            for i in (0..at.len().saturating_sub(1)).rev() {
                at[i].bound = at[i].bound.min(at[i + 1].bound);
                at[i].est = at[i].est.min(at[i + 1].est);
            }
        }
    }
    let covering = (0..cols.len()).filter(|&i| cols[i].covers(c.temp_c));
    let pick = match bound_kind {
        Bound::Upper => covering.min_by(|&a, &b| at[a].bound.total_cmp(&at[b].bound)),
        Bound::Lower => covering.max_by(|&a, &b| at[a].bound.total_cmp(&at[b].bound)),
    };
    let mut notes = Notes::default();
    let chosen = pick.unwrap_or_else(|| {
        notes = notes.with(Notes::TEMP_NOT_COVERED);
        match bound_kind {
            Bound::Upper => at.len() - 1,
            Bound::Lower => 0,
        }
    });
    if !at[chosen].covered {
        notes = notes.with(Notes::VCC_NOT_COVERED);
    }
    if at[chosen].covered && at[chosen].place == Place::Between {
        notes = notes.with(Notes::BETWEEN_COLUMNS);
    }
    // the estimate: linear in temperature between the columns' upper temperatures
    let temps: Vec<f64> = cols.iter().map(|col| col.temp_c).collect();
    let (est, place) = match temps.len() {
        1 => (at[0].est, at[0].place),
        n => {
            let t = c.temp_c;
            if t <= temps[0] {
                (at[0].est, at[0].place)
            } else if t >= temps[n - 1] {
                (at[n - 1].est, at[n - 1].place)
            } else {
                let i = temps.partition_point(|&x| x <= t).clamp(1, n - 1);
                let f = (t - temps[i - 1]) / (temps[i] - temps[i - 1]);
                let (a, b) = (&at[i - 1], &at[i]);
                let place = if f.abs() < 1e-12 {
                    a.place
                } else {
                    a.place.max(b.place)
                };
                (a.est + f * (b.est - a.est), place)
            }
        }
    };
    TempAt {
        bound: at[chosen].bound,
        est,
        notes,
        place,
    }
}

/// Notes on the conditions themselves: outside the family's or part's ranges, or not derated.
fn range_notes(fam: &Family, part: &Part, worst: &Series, c: &Conditions) -> Notes {
    let mut notes = Notes::default();
    if c.vcc_v < fam.vcc_min_v - 1e-9 || c.vcc_v > fam.vcc_max_v + 1e-9 {
        notes = notes.with(Notes::VCC_OUT_OF_SPEC);
    }
    if c.temp_c < part.temp_min_c - 1e-9 || c.temp_c > part.temp_max_c + 1e-9 {
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

/// The estimate's error range for a place, from the family's cross-validation.
fn err_of(shape: Option<&Shape>, place: Place) -> Option<(f64, f64)> {
    let s = shape?;
    let stats = match place {
        Place::OnColumn => return None,
        Place::Between => s.cv_between,
        Place::Above => s.cv_above,
        Place::Below => s.cv_below,
    };
    (stats.n > 0).then_some((stats.low_pct, stats.high_pct))
}

/// Extra delay for a load beyond a row's own: (guaranteed, estimate) in ns, and a note when the
/// family has no load model. The guaranteed part never goes below the data sheet's own load.
fn load_extra(
    fam: &Family,
    a: &TimingArc,
    row_load_pf: f64,
    load_pf: f64,
    vcc_v: f64,
) -> (f64, f64, Notes) {
    if a.kind != ArcKind::Delay || (load_pf - row_load_pf).abs() < 1e-12 {
        return (0.0, 0.0, Notes::default());
    }
    let Some(slope) = &fam.load else {
        return (0.0, 0.0, Notes::LOAD_NOT_MODELLED);
    };
    let shape = fam.shape.as_ref();
    let extra = load_pf - row_load_pf;
    let (b, _) = slope.bound_at(shape, vcc_v);
    (
        extra.max(0.0) * b,
        extra * slope.estimate(shape, vcc_v),
        Notes::default(),
    )
}

/// A part's arc at a corner and conditions.
pub fn eval(lib: &Library, part: usize, arc: usize, corner: Corner, c: &Conditions) -> Value {
    let p = &lib.parts[part];
    let a = &p.arcs[arc];
    if !a.variants.is_empty() {
        return worst_of_variants(lib, a, corner, c);
    }
    let fam = &lib.families[p.family];
    let shape = fam.shape.as_ref();
    let mut notes = range_notes(fam, p, &a.worst[0].series, c);
    let load_pf = c.load_pf.unwrap_or(p.load_pf);
    let worst = over_temperature(&a.worst, shape, c);
    let (lb, le, ln) = load_extra(fam, a, a.worst[0].series.load_pf, load_pf, c.vcc_v);
    let (ns, est, place, more) = match corner {
        Corner::Max => (
            Some(worst.bound + lb),
            Some(worst.est + le),
            worst.place,
            worst.notes.with(ln),
        ),
        Corner::Typ => match &a.typ {
            None => (
                Some(worst.bound + lb),
                Some(worst.est + le),
                worst.place,
                worst.notes.with(ln).with(Notes::TYP_FROM_MAX),
            ),
            Some(typ) => {
                let (b, e, place, n) = typical(fam, a, typ, &worst, c, load_pf);
                (Some(b), Some(e), place, n)
            }
        },
        Corner::Min => {
            // a minimum no column covers is as unknown as one never published (counted as 0)
            let m = (!a.min.is_empty()).then(|| over_temperature(&a.min, shape, c));
            match m {
                Some(m) if !m.notes.not_covered() => (Some(m.bound), Some(m.est), m.place, m.notes),
                _ => (None, None, Place::OnColumn, Notes::MIN_UNKNOWN),
            }
        }
    };
    notes = notes.with(more);
    let est_err_pct = if fam.derating == DeratingKind::None {
        None
    } else {
        err_of(shape, place)
    };
    Value {
        ns: ns.map(|v| v.max(0.0)),
        est_ns: est.map(|v| v.max(0.0)),
        est_err_pct,
        notes,
    }
}

/// The typical corner of one arc: (guaranteed-rule, estimate, place, notes).
fn typical(
    fam: &Family,
    a: &TimingArc,
    typ: &Series,
    worst: &TempAt,
    c: &Conditions,
    load_pf: f64,
) -> (f64, f64, Place, Notes) {
    let shape = fam.shape.as_ref();
    let at25 = |v: f64| {
        over_temperature(
            &a.worst,
            shape,
            &Conditions {
                vcc_v: v,
                temp_c: 25.0,
                load_pf: None,
            },
        )
    };
    let mut notes = Notes(worst.notes.0 & !Notes::BETWEEN_COLUMNS.0);
    if typ.vcc_v.len() >= 2 {
        // its own supply columns, carried to temperature by the guaranteed row's ratio
        let r = row_at(typ, shape, c.vcc_v);
        let base = at25(c.vcc_v);
        let ratio = |t: f64, b: f64| if b > 0.0 { t / b } else { 1.0 };
        let (lb, le, ln) = load_extra(fam, a, typ.load_pf, load_pf, c.vcc_v);
        notes = notes.with(ln);
        if r.place == Place::Between {
            notes = notes.with(Notes::BETWEEN_COLUMNS);
        }
        (
            r.bound * ratio(worst.bound, base.bound) + lb,
            r.est * ratio(worst.est, base.est) + le,
            r.place.max(worst.place),
            notes,
        )
    } else {
        // one column: the same ratio to the guaranteed row everywhere, at the guaranteed
        // row's load
        let v0 = typ.vcc_v[0];
        let row_load = a.worst[0].series.load_pf;
        let (_, to_row_load, _) = load_extra(fam, a, typ.load_pf, row_load, v0);
        let at_v0 = at25(v0);
        let ratio = if at_v0.est > 0.0 {
            (typ.ns[0] + to_row_load) / at_v0.est
        } else {
            1.0
        };
        let (lb, le, ln) = load_extra(fam, a, row_load, load_pf, c.vcc_v);
        notes = notes.with(ln).with(Notes::TYP_FOLLOWS_MAX);
        (
            ratio * worst.bound + lb,
            ratio * worst.est + le,
            worst.place.max(Place::Between),
            notes,
        )
    }
}

/// A generic part's arc: the worst of its variants (largest for maxima and limits, smallest
/// for minima), with every variant's notes. At the typical corner only the variants that
/// publish a typical count (a vendor's guaranteed maximum is no typical); the maximum stands
/// in only when no variant publishes one.
fn worst_of_variants(lib: &Library, a: &TimingArc, corner: Corner, c: &Conditions) -> Value {
    let mut vals: Vec<Value> = a
        .variants
        .iter()
        .map(|&(p, i)| eval(lib, p, i, corner, c))
        .collect();
    if corner == Corner::Typ && vals.iter().any(|v| !v.notes.has(Notes::TYP_FROM_MAX)) {
        vals.retain(|v| !v.notes.has(Notes::TYP_FROM_MAX));
    }
    let pick = |f: fn(&Value) -> Option<f64>| -> Option<f64> {
        let mut out: Option<f64> = None;
        for v in &vals {
            let x = f(v)?;
            out = Some(match (out, corner) {
                (None, _) => x,
                (Some(o), Corner::Min) => o.min(x),
                (Some(o), _) => o.max(x),
            });
        }
        out
    };
    let notes = vals.iter().fold(Notes::default(), |n, v| n.with(v.notes));
    let err = vals
        .iter()
        .filter_map(|v| v.est_err_pct)
        .reduce(|x, y| (x.0.min(y.0), x.1.max(y.1)));
    Value {
        ns: pick(|v| v.ns),
        est_ns: pick(|v| v.est_ns),
        est_err_pct: err,
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
    fn a_generic_typical_comes_from_the_vendors_that_publish_one() {
        // NXP 74HC04-Q100 Rev. 2 (2013): A→Y typ 9 ns at 4.5 V; the TI SN74HC04 row gives only
        // a maximum (19 ns at 4.5 V), which is no typical
        let lib = Library::builtin();
        let generic = at(
            &lib,
            "74HC04",
            "A->Y",
            ArcKind::Delay,
            Corner::Typ,
            4.5,
            25.0,
        );
        let nxp = at(
            &lib,
            "74HC04/nxp",
            "A->Y",
            ArcKind::Delay,
            Corner::Typ,
            4.5,
            25.0,
        );
        assert_eq!(generic.ns, nxp.ns);
        assert!((generic.ns.unwrap() - 9.0).abs() < 1e-9, "{:?}", generic.ns);
        assert!(!generic.notes.has(Notes::TYP_FROM_MAX));
        // the maximum corner still takes the worst vendor: TI's 19 ns over NXP's 17 ns
        let max = at(
            &lib,
            "74HC04",
            "A->Y",
            ArcKind::Delay,
            Corner::Max,
            4.5,
            25.0,
        );
        assert!((max.ns.unwrap() - 19.0).abs() < 1e-9, "{:?}", max.ns);
    }

    #[test]
    fn delay_never_falls_as_supply_falls() {
        let lib = Library::builtin();
        let mut last = (0.0, 0.0);
        for i in (0..=60).rev() {
            let v = 1.0 + 0.1 * i as f64;
            let d = at(&lib, "74HC04", "A->Y", ArcKind::Delay, Corner::Max, v, 25.0);
            let (b, e) = (d.ns.unwrap(), d.est_ns.unwrap());
            assert!(b >= last.0 && e >= last.1, "faster at {v} V");
            assert!(e <= b + 1e-9, "the estimate above the guarantee at {v} V");
            last = (b, e);
        }
    }

    #[test]
    fn between_columns_the_lower_supply_column_is_guaranteed() {
        // NXP 74HC04-Q100 Rev. 2 (2013): A→Y max 85 / 17 / 14 ns at 2.0 / 4.5 / 6.0 V, 25 °C
        let lib = Library::builtin();
        let v = at(
            &lib,
            "74HC04/nxp",
            "A->Y",
            ArcKind::Delay,
            Corner::Max,
            3.3,
            25.0,
        );
        assert_eq!(v.ns, Some(85.0));
        assert!(v.notes.has(Notes::BETWEEN_COLUMNS));
        let e = v.est_ns.unwrap();
        assert!(e > 17.0 && e < 85.0, "{e}");
        let v = at(
            &lib,
            "74HC04/nxp",
            "A->Y",
            ArcKind::Delay,
            Corner::Max,
            5.0,
            25.0,
        );
        assert_eq!(v.ns, Some(17.0));
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
        assert!(v.notes.has(Notes::VCC_NOT_COVERED));
        let ok = at(
            &lib,
            "74HCT245",
            "A->B",
            ArcKind::Delay,
            Corner::Max,
            4.8,
            25.0,
        );
        assert!(!ok.notes.out_of_spec() && !ok.notes.not_covered());
    }

    #[test]
    fn cold_uses_the_column_that_covers_it() {
        // NXP 74HC04-Q100 Rev. 2 (2013): the −40…85 °C column (21 ns at 4.5 V) covers −40 °C;
        // the 25 °C column (17 ns) holds at 25 °C only
        let lib = Library::builtin();
        let v = at(
            &lib,
            "74HC04/nxp",
            "A->Y",
            ArcKind::Delay,
            Corner::Max,
            4.5,
            -40.0,
        );
        assert_eq!(v.ns, Some(21.0));
        assert!(!v.notes.not_covered() && !v.notes.out_of_spec());
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
        let p = lib.part_index("74HC04/nxp").unwrap();
        let c = |load| Conditions {
            vcc_v: 4.5,
            temp_c: 25.0,
            load_pf: load,
        };
        let base = eval(&lib, p, 0, Corner::Max, &c(None)).ns.unwrap();
        let heavy = eval(&lib, p, 0, Corner::Max, &c(Some(150.0))).ns.unwrap();
        // TI SN74HC240 SCLS128H: 20 ns at 50 pF, 30 ns at 150 pF (4.5 V): 0.10 ns/pF
        assert!((heavy - base - 100.0 * 0.10).abs() < 1e-9, "{base} {heavy}");
        let light = eval(&lib, p, 0, Corner::Max, &c(Some(15.0))).ns.unwrap();
        assert_eq!(light, base, "a lighter load never undercuts the data sheet");
    }
}

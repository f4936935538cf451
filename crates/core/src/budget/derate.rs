//! Derating: a part's delay at any supply voltage, temperature and load, from its data-sheet columns.
//!
//! Voltage: the alpha-power law t = k·V/(V − Vt)^α (Sakurai & Newton, IEEE JSSC 25(2), 1990) with
//! α and Vt fitted once per family over every multi-column row of its parts, k per row. Between a
//! row's own columns the model's log-error is interpolated, so each data-sheet column is reproduced
//! exactly and the model only shapes the curve between and beyond them. Its fit error is reported.
//! Temperature: linear between the data sheet's temperature columns, exact at each column.

use serde::{Deserialize, Serialize};

use super::library::{ArcKind, Column, DeratingKind, Library, Series};

/// Fitted voltage shape of a family.
#[derive(Clone, Debug, Serialize)]
pub struct Shape {
    /// Velocity-saturation exponent α.
    pub alpha: f64,
    /// Threshold voltage Vt in V.
    pub vt_v: f64,
    /// RMS relative error of the fit over all rows, in %.
    pub rms_pct: f64,
    /// Largest relative error of the fit at any column, in %.
    pub max_pct: f64,
    /// Rows (data-sheet table lines) the fit used.
    pub rows: usize,
    /// Points the fit used.
    pub points: usize,
    /// Rows left out as outliers (more than 3× the RMS error).
    pub excluded: usize,
    /// The family whose rows were fitted.
    pub fitted_on: String,
}

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

/// ln of the alpha-power shape g(V) = V / (V − Vt)^α.
pub fn ln_g(shape: &Shape, vcc_v: f64) -> f64 {
    vcc_v.ln() - shape.alpha * (vcc_v - shape.vt_v).max(0.05).ln()
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

/// Whether a row follows the voltage model: all values positive and not all equal (flat rows,
/// such as a hold limit of 5 ns at every supply, are interpolated as given).
fn modelled(series: &Series) -> bool {
    series.ns.iter().all(|v| *v > 0.0) && series.ns.iter().any(|v| *v != series.ns[0])
}

/// Value of one row at a supply voltage.
pub fn eval_series(series: &Series, shape: Option<&Shape>, vcc_v: f64) -> f64 {
    match shape {
        Some(s) if modelled(series) => {
            let r = interp(&series.vcc_v, &series.resid, vcc_v);
            (series.ln_k + ln_g(s, vcc_v) + r).exp()
        }
        _ => interp(&series.vcc_v, &series.ns, vcc_v),
    }
}

/// The model's correction near `vcc_v` in %: the larger |error| of the two columns around it
/// (the nearest column outside the row), or the family's RMS error for one-column rows.
pub fn row_error_pct(series: &Series, shape: Option<&Shape>, vcc_v: f64) -> Option<f64> {
    let s = shape?;
    if series.vcc_v.len() < 2 {
        return Some(s.rms_pct);
    }
    if !modelled(series) {
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

/// A part's arc at a corner and conditions.
pub fn eval(lib: &Library, part: usize, arc: usize, corner: Corner, c: &Conditions) -> Value {
    let p = &lib.parts[part];
    let a = &p.arcs[arc];
    let fam = &lib.families[p.family];
    let shape = fam.shape.as_ref();
    let mut notes = Notes::default();
    if c.vcc_v < fam.vcc_min_v - 1e-9 || c.vcc_v > fam.vcc_max_v + 1e-9 {
        notes = notes.with(Notes::VCC_OUT_OF_SPEC);
    }
    if c.temp_c < fam.temp_min_c || c.temp_c > fam.temp_max_c {
        notes = notes.with(Notes::TEMP_OUT_OF_SPEC);
    }
    if fam.derating == DeratingKind::None
        && a.worst[0].series.vcc_v.len() == 1
        && (c.vcc_v - a.worst[0].series.vcc_v[0]).abs() > 1e-9
    {
        notes = notes.with(Notes::NOT_DERATED);
    }
    let load_pf = c.load_pf.unwrap_or(p.load_pf);
    let load_extra = |series: &Series| -> f64 {
        if a.kind != ArcKind::Delay || fam.load_ns_per_pf == 0.0 {
            return 0.0;
        }
        let scale = shape.map_or(1.0, |s| (ln_g(s, c.vcc_v) - ln_g(s, 4.5)).exp());
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

/// A family row prepared for fitting: ln V and ln t per point.
struct FitRow {
    ln_v: Vec<f64>,
    v: Vec<f64>,
    ln_t: Vec<f64>,
}

fn sse(rows: &[FitRow], alpha: f64, vt: f64) -> f64 {
    let mut total = 0.0;
    for r in rows {
        let n = r.v.len() as f64;
        let mut resid_sum = 0.0;
        let mut resid_sq = 0.0;
        for i in 0..r.v.len() {
            let d = r.ln_t[i] - (r.ln_v[i] - alpha * (r.v[i] - vt).max(0.05).ln());
            resid_sum += d;
            resid_sq += d * d;
        }
        total += resid_sq - resid_sum * resid_sum / n;
    }
    total
}

/// Fit α and Vt minimising the squared log error with a free k per row, then refit once without
/// the rows whose worst error exceeds 3× the RMS (guard-banded columns, e.g. a 3.0 V column
/// specified far looser than its neighbours). `excluded` in the result counts those rows.
pub fn fit_shape(rows: &[(Vec<f64>, Vec<f64>)], name: &str) -> Option<Shape> {
    let first = fit_once(rows, name)?;
    let keep: Vec<(Vec<f64>, Vec<f64>)> = rows
        .iter()
        .filter(|(v, t)| row_worst_pct(&first, v, t) <= 3.0 * first.rms_pct)
        .cloned()
        .collect();
    let dropped = rows.len() - keep.len();
    if dropped == 0 {
        return Some(first);
    }
    let mut second = fit_once(&keep, name)?;
    second.excluded = first.rows - second.rows;
    Some(second)
}

fn row_worst_pct(shape: &Shape, v: &[f64], t: &[f64]) -> f64 {
    if v.len() < 2 || t.iter().any(|x| *x <= 0.0) {
        return 0.0;
    }
    let lg: Vec<f64> = v.iter().map(|x| ln_g(shape, *x)).collect();
    let ln_k = t.iter().zip(&lg).map(|(t, g)| t.ln() - g).sum::<f64>() / v.len() as f64;
    t.iter()
        .zip(&lg)
        .map(|(t, g)| ((t.ln() - g - ln_k).exp() - 1.0).abs() * 100.0)
        .fold(0.0, f64::max)
}

fn fit_once(rows: &[(Vec<f64>, Vec<f64>)], name: &str) -> Option<Shape> {
    let rows: Vec<FitRow> = rows
        .iter()
        .filter(|(v, t)| v.len() >= 2 && t.iter().all(|x| *x > 0.0) && t.iter().any(|x| *x != t[0]))
        .map(|(v, t)| FitRow {
            ln_v: v.iter().map(|x| x.ln()).collect(),
            v: v.clone(),
            ln_t: t.iter().map(|x| x.ln()).collect(),
        })
        .collect();
    if rows.is_empty() {
        return None;
    }
    let vmin = rows
        .iter()
        .flat_map(|r| r.v.iter().copied())
        .fold(f64::INFINITY, f64::min);
    let vt_hi = (vmin - 0.1).max(0.0);
    // (sse, alpha, vt) of the best point so far
    let mut best = (f64::INFINITY, 1.5, 0.0);
    let search = |best: &mut (f64, f64, f64), a_lo: f64, a_hi: f64, v_lo: f64, v_hi: f64| {
        const STEPS: usize = 24;
        for i in 0..=STEPS {
            let a = a_lo + (a_hi - a_lo) * i as f64 / STEPS as f64;
            for j in 0..=STEPS {
                let vt = (v_lo + (v_hi - v_lo) * j as f64 / STEPS as f64).clamp(0.0, vt_hi);
                let e = sse(&rows, a, vt);
                if e < best.0 {
                    *best = (e, a, vt);
                }
            }
        }
    };
    search(&mut best, 0.5, 3.0, 0.0, vt_hi);
    for width in [0.2, 0.04, 0.008] {
        let (_, a, v) = best;
        search(
            &mut best,
            (a - width).max(0.3),
            a + width,
            (v - width).max(0.0),
            (v + width).min(vt_hi),
        );
    }
    let (_, best_a, best_vt) = best;
    let shape = Shape {
        alpha: best_a,
        vt_v: best_vt,
        rms_pct: 0.0,
        max_pct: 0.0,
        rows: rows.len(),
        points: rows.iter().map(|r| r.v.len()).sum(),
        excluded: 0,
        fitted_on: name.to_string(),
    };
    let (rms_pct, max_pct) = shape_error(&rows, &shape);
    Some(Shape {
        rms_pct,
        max_pct,
        ..shape
    })
}

/// RMS and worst relative error (%) of a shape over rows, with the best k for each row.
fn shape_error(rows: &[FitRow], shape: &Shape) -> (f64, f64) {
    let (mut sq, mut n, mut max) = (0.0, 0usize, 0.0f64);
    for r in rows {
        let lg: Vec<f64> = r.v.iter().map(|v| ln_g(shape, *v)).collect();
        let ln_k = r.ln_t.iter().zip(&lg).map(|(t, g)| t - g).sum::<f64>() / r.v.len() as f64;
        for (t, g) in r.ln_t.iter().zip(&lg) {
            let rel = (t - g - ln_k).exp() - 1.0;
            sq += rel * rel;
            n += 1;
            max = max.max(rel.abs());
        }
    }
    ((sq / n.max(1) as f64).sqrt() * 100.0, max * 100.0)
}

/// RMS and worst relative error (%) of given α and Vt over rows (V columns, ns values).
pub fn error_of(rows: &[(Vec<f64>, Vec<f64>)], alpha: f64, vt_v: f64) -> (f64, f64) {
    let rows: Vec<FitRow> = rows
        .iter()
        .map(|(v, t)| FitRow {
            ln_v: v.iter().map(|x| x.ln()).collect(),
            v: v.clone(),
            ln_t: t.iter().map(|x| x.ln()).collect(),
        })
        .collect();
    let shape = Shape {
        alpha,
        vt_v,
        rms_pct: 0.0,
        max_pct: 0.0,
        rows: rows.len(),
        points: 0,
        excluded: 0,
        fitted_on: String::new(),
    };
    shape_error(&rows, &shape)
}

/// Every row of every part whose family takes its shape from `fam`.
fn rows_for(lib: &Library, fam: usize) -> Vec<(Vec<f64>, Vec<f64>)> {
    let name = &lib.families[fam].name;
    let mut out = Vec::new();
    for p in &lib.parts {
        let pf = &lib.families[p.family];
        if pf.derating != DeratingKind::AlphaPower
            || pf.shape_from.as_deref().unwrap_or(&pf.name) != name
        {
            continue;
        }
        // propagation delays only: setup/hold limits are often guard-banded or flat
        for a in p.arcs.iter().filter(|a| a.kind == ArcKind::Delay) {
            for col in a.worst.iter().chain(&a.min) {
                out.push((col.series.vcc_v.clone(), col.series.ns.clone()));
            }
            if let Some(t) = &a.typ {
                out.push((t.vcc_v.clone(), t.ns.clone()));
            }
        }
    }
    out
}

fn prepare(series: &mut Series, shape: &Shape) {
    if !modelled(series) {
        return;
    }
    let lg: Vec<f64> = series.vcc_v.iter().map(|v| ln_g(shape, *v)).collect();
    let n = series.ns.len() as f64;
    series.ln_k = series
        .ns
        .iter()
        .zip(&lg)
        .map(|(t, g)| t.ln() - g)
        .sum::<f64>()
        / n;
    series.resid = series
        .ns
        .iter()
        .zip(&lg)
        .map(|(t, g)| t.ln() - g - series.ln_k)
        .collect();
}

/// Fit each family's shape and prepare every row's k and residuals.
pub fn fit_library(lib: &mut Library) {
    let own: Vec<Option<Shape>> = (0..lib.families.len())
        .map(|i| {
            let f = &lib.families[i];
            if f.derating == DeratingKind::AlphaPower && f.shape_from.is_none() {
                fit_shape(&rows_for(lib, i), &f.name)
            } else {
                None
            }
        })
        .collect();
    for i in 0..lib.families.len() {
        let shape = match (&lib.families[i].derating, &lib.families[i].shape_from) {
            (DeratingKind::None, _) => None,
            (_, None) => own[i].clone(),
            (_, Some(from)) => lib
                .families
                .iter()
                .position(|f| &f.name == from)
                .and_then(|j| own[j].clone()),
        };
        lib.families[i].shape = shape;
    }
    let shapes: Vec<Option<Shape>> = lib.families.iter().map(|f| f.shape.clone()).collect();
    for p in &mut lib.parts {
        let Some(shape) = &shapes[p.family] else {
            continue;
        };
        for a in &mut p.arcs {
            for col in a.worst.iter_mut().chain(a.min.iter_mut()) {
                prepare(&mut col.series, shape);
            }
            if let Some(t) = &mut a.typ {
                prepare(t, shape);
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::budget::library::Library;

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
    fn fitted_family_shape_is_physical() {
        // The reference table's own fit of the 74HC04/74HC30 maxima found α ≈ 1.4–1.55 and
        // Vt ≈ 0.9–1.4 V (REFERENCES.md §1, computed). A family-wide fit lands near there.
        let lib = Library::builtin();
        let hc = lib.families.iter().find(|f| f.name == "74HC").unwrap();
        let s = hc.shape.as_ref().unwrap();
        // α is above 1 (velocity saturation) and Vt lies below the lowest column (2.0 V).
        // The family fit mixes rows "from memory" with seen ones, so only physical bounds here;
        // tests/budget_reference.rs checks a fit on seen rows alone against the reference ranges.
        assert!((1.0..2.5).contains(&s.alpha), "alpha {}", s.alpha);
        assert!((0.3..1.9).contains(&s.vt_v), "vt {}", s.vt_v);
        assert!(s.rms_pct < 12.0, "rms {}", s.rms_pct);
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

//! Fitting the voltage model once a library is read: each family's α and Vt over the multi-column
//! rows of its parts, then every row's k and its residual at each column.

use super::model::{ArcKind, DeratingKind, Library, Series, Shape, follows_model};

/// Fit each family's shape and prepare every row's k and residuals.
pub(super) fn fit_library(lib: &mut Library) {
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

/// The best ln k of one row under a shape (the mean log error) and the log error left at each
/// column.
fn row_fit(shape: &Shape, v: &[f64], ln_t: impl Iterator<Item = f64> + Clone) -> (f64, Vec<f64>) {
    let lg: Vec<f64> = v.iter().map(|x| shape.ln_g(*x)).collect();
    let ln_k = ln_t.clone().zip(&lg).map(|(t, g)| t - g).sum::<f64>() / v.len() as f64;
    let resid = ln_t.zip(&lg).map(|(t, g)| t - g - ln_k).collect();
    (ln_k, resid)
}

fn prepare(series: &mut Series, shape: &Shape) {
    if !series.follows_model() {
        return;
    }
    let (ln_k, resid) = row_fit(shape, &series.vcc_v, series.ns.iter().map(|t| t.ln()));
    series.ln_k = ln_k;
    series.resid = resid;
}

/// A family row prepared for fitting: V and ln V, ln t per point.
struct FitRow {
    ln_v: Vec<f64>,
    v: Vec<f64>,
    ln_t: Vec<f64>,
}

impl FitRow {
    fn new(v: &[f64], t: &[f64]) -> FitRow {
        FitRow {
            ln_v: v.iter().map(|x| x.ln()).collect(),
            v: v.to_vec(),
            ln_t: t.iter().map(|x| x.ln()).collect(),
        }
    }
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
    let (_, resid) = row_fit(shape, v, t.iter().map(|t| t.ln()));
    resid
        .iter()
        .map(|r| (r.exp() - 1.0).abs() * 100.0)
        .fold(0.0, f64::max)
}

fn fit_once(rows: &[(Vec<f64>, Vec<f64>)], name: &str) -> Option<Shape> {
    let rows: Vec<FitRow> = rows
        .iter()
        .filter(|(v, t)| v.len() >= 2 && follows_model(t))
        .map(|(v, t)| FitRow::new(v, t))
        .collect();
    if rows.is_empty() {
        return None;
    }
    let (alpha, vt_v) = grid_search(&rows);
    let shape = Shape {
        points: rows.iter().map(|r| r.v.len()).sum(),
        fitted_on: name.to_string(),
        ..bare_shape(alpha, vt_v, rows.len())
    };
    let (rms_pct, max_pct) = shape_error(&rows, &shape);
    Some(Shape {
        rms_pct,
        max_pct,
        ..shape
    })
}

/// α and Vt of the least squared error: a 25 × 25 grid, then three finer grids around the best
/// point; Vt stays 0.1 V below the lowest column.
fn grid_search(rows: &[FitRow]) -> (f64, f64) {
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
                let e = sse(rows, a, vt);
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
    (best.1, best.2)
}

/// RMS and worst relative error (%) of a shape over rows, with the best k for each row.
fn shape_error(rows: &[FitRow], shape: &Shape) -> (f64, f64) {
    let (mut sq, mut n, mut max) = (0.0, 0usize, 0.0f64);
    for r in rows {
        let (_, resid) = row_fit(shape, &r.v, r.ln_t.iter().copied());
        for d in resid {
            let rel = d.exp() - 1.0;
            sq += rel * rel;
            n += 1;
            max = max.max(rel.abs());
        }
    }
    ((sq / n.max(1) as f64).sqrt() * 100.0, max * 100.0)
}

/// RMS and worst relative error (%) of given α and Vt over rows (V columns, ns values).
pub fn error_of(rows: &[(Vec<f64>, Vec<f64>)], alpha: f64, vt_v: f64) -> (f64, f64) {
    let rows: Vec<FitRow> = rows.iter().map(|(v, t)| FitRow::new(v, t)).collect();
    shape_error(&rows, &bare_shape(alpha, vt_v, rows.len()))
}

/// A shape of given α and Vt over `rows` rows, its error not yet measured.
fn bare_shape(alpha: f64, vt_v: f64, rows: usize) -> Shape {
    Shape {
        alpha,
        vt_v,
        rms_pct: 0.0,
        max_pct: 0.0,
        rows,
        points: 0,
        excluded: 0,
        fitted_on: String::new(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fitted_family_shape_is_physical() {
        // A fit of the 74HC04/74HC30 maxima (NXP 74HC04-Q100 Rev. 2, 2013; Philips 74HC/HCT30,
        // Dec 1990; computed) found α ≈ 1.4–1.55 and Vt ≈ 0.9–1.4 V. A family-wide fit lands
        // near there.
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
}

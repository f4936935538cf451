//! Fitting the voltage model once a library is read: each family's α and Vt over the
//! multi-column delay rows of its parts, the estimate's error found by leaving each supply column
//! out of the whole family in turn, and every row's envelope and model coordinate.

use super::model::{ArcKind, Bound, DeratingKind, ErrStats, Library, Series, Shape, follows_model};

/// Fit each family's shape, measure its estimate, and prepare every row for evaluation.
pub(super) fn fit_library(lib: &mut Library) {
    let own: Vec<Option<Shape>> = (0..lib.families.len())
        .map(|i| {
            let f = &lib.families[i];
            if f.derating == DeratingKind::AlphaPower && f.shape_from.is_none() {
                let rows = rows_for(lib, i);
                fit_shape(&rows, &f.name).map(|s| with_cross_validation(s, &rows))
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
        let fam = &mut lib.families[i];
        if let Some(load) = &mut fam.load {
            load.prepare(shape.as_ref());
        }
        fam.shape = shape;
    }
    let shapes: Vec<Option<Shape>> = lib.families.iter().map(|f| f.shape.clone()).collect();
    for p in &mut lib.parts {
        let shape = shapes[p.family].as_ref();
        for a in &mut p.arcs {
            for col in a.worst.iter_mut().chain(a.min.iter_mut()) {
                col.series.prepare(shape);
            }
            if let Some(t) = &mut a.typ {
                t.prepare(shape);
            }
        }
    }
}

/// Every guaranteed delay row of every part whose family takes its shape from `fam`.
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
        // guaranteed propagation delays only: the estimate stands beside guaranteed values
        // (typical rows fall less steeply at low supply than the limits do, and setup/hold
        // limits are often flat)
        for a in p.arcs.iter().filter(|a| a.kind == ArcKind::Delay) {
            for col in &a.worst {
                out.push((col.series.vcc_v.clone(), col.series.ns.clone()));
            }
        }
    }
    out.retain(|(v, t)| v.len() >= 2 && follows_model(t));
    out
}

/// The shape's estimate tried on every column of every row: for each supply voltage any row
/// has, the family is refitted without that voltage's columns (threshold bounded as in the
/// full fit), and each row that had one predicts it from its remaining columns. Vendors' odd
/// columns (3.0 V, 5.5 V) count like any, including rows the fit itself leaves out.
fn with_cross_validation(shape: Shape, rows: &[(Vec<f64>, Vec<f64>)]) -> Shape {
    let mut volts: Vec<f64> = rows.iter().flat_map(|(v, _)| v.iter().copied()).collect();
    volts.sort_by(f64::total_cmp);
    volts.dedup_by(|a, b| (*a - *b).abs() < 1e-9);
    let vt_hi = vt_bound(rows);
    let (mut between, mut above, mut below) = (Vec::new(), Vec::new(), Vec::new());
    for &vc in &volts {
        let has = |v: &[f64]| v.iter().position(|x| (x - vc).abs() < 1e-9);
        let without = |v: &[f64], t: &[f64], i: usize| {
            let (mut v, mut t) = (v.to_vec(), t.to_vec());
            v.remove(i);
            t.remove(i);
            (v, t)
        };
        let reduced: Vec<(Vec<f64>, Vec<f64>)> = rows
            .iter()
            .map(|(v, t)| match has(v) {
                Some(i) => without(v, t, i),
                None => (v.clone(), t.clone()),
            })
            .collect();
        let Some(fitted) = fit_robust(&reduced, &shape.fitted_on, vt_hi) else {
            continue;
        };
        for (v, t) in rows {
            let Some(i) = has(v) else { continue };
            let (rv, rt) = without(v, t, i);
            let mut s = Series::new(rv, rt, 0.0, Bound::Upper);
            s.prepare(Some(&fitted));
            let err = s.estimate(Some(&fitted), vc) / t[i] - 1.0;
            if s.inside(vc) {
                between.push(err);
            } else if vc > s.vcc_v[0] {
                above.push(err);
            } else {
                below.push(err);
            }
        }
    }
    Shape {
        cv_between: ErrStats::of(&between),
        cv_above: ErrStats::of(&above),
        cv_below: ErrStats::of(&below),
        ..shape
    }
}

/// The highest threshold a fit may take: 0.1 V below the lowest column of the rows.
fn vt_bound(rows: &[(Vec<f64>, Vec<f64>)]) -> f64 {
    let vmin = rows
        .iter()
        .flat_map(|(v, _)| v.iter().copied())
        .fold(f64::INFINITY, f64::min);
    (vmin - 0.1).max(0.0)
}

/// The best ln k of one row under a shape (the mean log error) and the log error left at each
/// column.
fn row_fit(shape: &Shape, v: &[f64], ln_t: impl Iterator<Item = f64> + Clone) -> (f64, Vec<f64>) {
    let lg: Vec<f64> = v.iter().map(|x| shape.ln_g(*x)).collect();
    let ln_k = ln_t.clone().zip(&lg).map(|(t, g)| t - g).sum::<f64>() / v.len() as f64;
    let resid = ln_t.zip(&lg).map(|(t, g)| t - g - ln_k).collect();
    (ln_k, resid)
}

/// Range of α searched: ≥ 1 keeps g(V) falling with V at every supply.
const ALPHA_RANGE: (f64, f64) = (1.0, 2.5);

/// Rows prepared for fitting: per point a = ln t − ln V and the index of its supply voltage.
struct FitRows {
    volts: Vec<f64>,
    rows: Vec<Vec<(f64, usize)>>,
    /// Σ over rows of Σ(a − ā)², which no parameter changes.
    s_aa: f64,
}

impl FitRows {
    fn new(rows: &[(Vec<f64>, Vec<f64>)]) -> FitRows {
        let mut volts: Vec<f64> = rows.iter().flat_map(|(v, _)| v.iter().copied()).collect();
        volts.sort_by(f64::total_cmp);
        volts.dedup();
        let rows: Vec<Vec<(f64, usize)>> = rows
            .iter()
            .map(|(v, t)| {
                v.iter()
                    .zip(t)
                    .map(|(v, t)| {
                        let k = volts.partition_point(|x| x < v);
                        (t.ln() - v.ln(), k)
                    })
                    .collect()
            })
            .collect();
        let s_aa = rows
            .iter()
            .map(|r| {
                let n = r.len() as f64;
                let sa: f64 = r.iter().map(|p| p.0).sum();
                r.iter().map(|p| p.0 * p.0).sum::<f64>() - sa * sa / n
            })
            .sum();
        FitRows { volts, rows, s_aa }
    }

    /// The best α (within range) for a threshold and the squared log error it leaves: with k
    /// free per row the error is a quadratic in α, so α follows in closed form.
    fn best_alpha(&self, vt: f64) -> (f64, f64) {
        let b: Vec<f64> = self.volts.iter().map(|v| (v - vt).ln()).collect();
        let (mut s_ab, mut s_bb) = (0.0, 0.0);
        for r in &self.rows {
            let n = r.len() as f64;
            let (mut sa, mut sb, mut sab, mut sbb) = (0.0, 0.0, 0.0, 0.0);
            for &(a, k) in r {
                sa += a;
                sb += b[k];
                sab += a * b[k];
                sbb += b[k] * b[k];
            }
            s_ab += sab - sa * sb / n;
            s_bb += sbb - sb * sb / n;
        }
        let alpha = if s_bb > 0.0 {
            (-s_ab / s_bb).clamp(ALPHA_RANGE.0, ALPHA_RANGE.1)
        } else {
            ALPHA_RANGE.0
        };
        (alpha, self.s_aa + 2.0 * alpha * s_ab + alpha * alpha * s_bb)
    }
}

/// Fit α and Vt minimising the squared log error with a free k per row, then refit once
/// without the rows whose worst error exceeds 3× the RMS (guard-banded columns, e.g. a 3.0 V
/// column specified far looser than its neighbours): the estimate follows the law the other
/// rows share, and the cross-validation still counts the rows left out.
pub fn fit_shape(rows: &[(Vec<f64>, Vec<f64>)], name: &str) -> Option<Shape> {
    fit_robust(rows, name, vt_bound(rows))
}

fn fit_robust(rows: &[(Vec<f64>, Vec<f64>)], name: &str, vt_hi: f64) -> Option<Shape> {
    let rows: Vec<(Vec<f64>, Vec<f64>)> = rows
        .iter()
        .filter(|(v, t)| v.len() >= 2 && follows_model(t))
        .cloned()
        .collect();
    let first = fit_once(&rows, name, vt_hi)?;
    let keep: Vec<(Vec<f64>, Vec<f64>)> = rows
        .iter()
        .filter(|(v, t)| row_worst_pct(&first, v, t) <= 3.0 * first.rms_pct)
        .cloned()
        .collect();
    if keep.len() == rows.len() {
        return Some(first);
    }
    let second = fit_once(&keep, name, vt_hi)?;
    Some(Shape {
        excluded: rows.len() - keep.len(),
        ..second
    })
}

fn row_worst_pct(shape: &Shape, v: &[f64], t: &[f64]) -> f64 {
    let (_, resid) = row_fit(shape, v, t.iter().map(|t| t.ln()));
    resid
        .iter()
        .map(|r| (r.exp() - 1.0).abs() * 100.0)
        .fold(0.0, f64::max)
}

/// One least-squares fit over rows that follow the law, Vt at most `vt_hi`.
fn fit_once(rows: &[(Vec<f64>, Vec<f64>)], name: &str, vt_hi: f64) -> Option<Shape> {
    if rows.is_empty() {
        return None;
    }
    let fr = FitRows::new(rows);
    let vt_hi = vt_hi.min(fr.volts[0] - 0.1).max(0.0);
    // a grid over Vt, then three finer grids around the best point
    let mut best = (f64::INFINITY, ALPHA_RANGE.0, 0.0);
    let (mut lo, mut hi) = (0.0, vt_hi);
    for _ in 0..4 {
        const STEPS: usize = 100;
        for j in 0..=STEPS {
            let vt = lo + (hi - lo) * j as f64 / STEPS as f64;
            let (alpha, e) = fr.best_alpha(vt);
            if e < best.0 {
                best = (e, alpha, vt);
            }
        }
        let step = (hi - lo) / STEPS as f64;
        lo = (best.2 - 2.0 * step).max(0.0);
        hi = (best.2 + 2.0 * step).min(vt_hi);
    }
    let shape = Shape {
        points: rows.iter().map(|r| r.0.len()).sum(),
        fitted_on: name.to_string(),
        ..bare_shape(best.1, best.2, rows.len())
    };
    let (rms_pct, max_pct) = shape_error(rows, &shape);
    Some(Shape {
        rms_pct,
        max_pct,
        ..shape
    })
}

/// RMS and worst relative error (%) of a shape over rows, with the best k for each row.
fn shape_error(rows: &[(Vec<f64>, Vec<f64>)], shape: &Shape) -> (f64, f64) {
    let (mut sq, mut n, mut max) = (0.0, 0usize, 0.0f64);
    for (v, t) in rows {
        let (_, resid) = row_fit(shape, v, t.iter().map(|x| x.ln()));
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
    shape_error(rows, &bare_shape(alpha, vt_v, rows.len()))
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
        cv_between: ErrStats::default(),
        cv_above: ErrStats::default(),
        cv_below: ErrStats::default(),
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
        // α is at least 1 (velocity saturation) and Vt lies below the lowest column (2.0 V).
        assert!((1.0..=2.5).contains(&s.alpha), "alpha {}", s.alpha);
        assert!((0.0..1.9).contains(&s.vt_v), "vt {}", s.vt_v);
        // every supply column of the family was tried as a held-out column
        assert!(s.cv_between.n > 10 && s.cv_above.n > 10, "{s:?}");
    }

    #[test]
    fn fit_and_shape_agree_on_a_row_that_is_exactly_a_power_law() {
        // computed: t = 3·V/(V − 0.8)^1.6 at 2, 3, 4.5 and 6 V
        let v = vec![2.0, 3.0, 4.5, 6.0];
        let t: Vec<f64> = v
            .iter()
            .map(|x: &f64| 3.0 * x / (x - 0.8f64).powf(1.6))
            .collect();
        let s = fit_shape(
            &[
                (v.clone(), t.clone()),
                (v, t.iter().map(|x| x * 2.0).collect()),
            ],
            "t",
        )
        .unwrap();
        assert!(
            (s.alpha - 1.6).abs() < 1e-3 && (s.vt_v - 0.8).abs() < 1e-3,
            "{s:?}"
        );
        assert!(s.max_pct < 1e-3);
    }
}

//! Every row of the library (and of a user part folder) on a fine grid of supply and
//! temperature: never faster at a lower supply or a higher temperature, the guaranteed value
//! never below a data-sheet column it lies between, and the estimate never above it. These are
//! properties of the rules (docs: "How the budget is computed"), checked against the library's
//! own published rows, which the tests in budget_reference.rs check against their data sheets.

use slackmeter::budget::derate::{self, Conditions, Corner};
use slackmeter::budget::library::{Bound, Library};

const EPS: f64 = 1e-9;

fn at(
    lib: &Library,
    p: usize,
    a: usize,
    corner: Corner,
    v: f64,
    t: f64,
) -> (Option<f64>, Option<f64>) {
    let c = Conditions {
        vcc_v: v,
        temp_c: t,
        load_pf: None,
    };
    let x = derate::eval(lib, p, a, corner, &c);
    (x.ns, x.est_ns)
}

/// Every violation found in the parts `parts` of `lib`, one line each.
fn violations(lib: &Library, parts: &[usize]) -> Vec<String> {
    let volts: Vec<f64> = (0..=60).map(|i| 1.0 + 0.1 * i as f64).collect();
    let mut temps: Vec<f64> = (0..=18)
        .map(|i| -55.0 + 10.0 * i as f64)
        .chain([25.0])
        .collect();
    temps.sort_by(f64::total_cmp);
    let mut out = Vec::new();
    for &p in parts {
        let part = &lib.parts[p];
        for (a, arc) in part.arcs.iter().enumerate() {
            let who = format!("{} {} {}", part.type_name, arc.name, arc.kind.name());
            for corner in [Corner::Max, Corner::Typ, Corner::Min] {
                for &t in &temps {
                    // supply: never faster as it falls
                    let mut last: Option<(f64, f64)> = None;
                    for &v in volts.iter().rev() {
                        let (Some(b), Some(e)) = at(lib, p, a, corner, v, t) else {
                            continue;
                        };
                        if let Some((lb, le)) = last
                            && (b < lb - EPS || e < le - EPS)
                        {
                            out.push(format!(
                                "{who} {corner}: faster at {v:.1} V than above ({t} °C)"
                            ));
                        }
                        if corner == Corner::Max && e > b + EPS {
                            out.push(format!(
                                "{who}: estimate {e} above the guarantee {b} at {v:.1} V, {t} °C"
                            ));
                        }
                        last = Some((b, e));
                    }
                }
                // temperature: never faster as it gets hotter from 25 °C, and colder than 25 °C
                // the guarantee is the column that covers it (never below the 25 °C one)
                for &v in &volts {
                    let mut last: Option<(f64, f64)> = None;
                    let t25 = at(lib, p, a, corner, v, 25.0).0;
                    for &t in temps.iter().filter(|t| **t >= 25.0) {
                        let (Some(b), Some(e)) = at(lib, p, a, corner, v, t) else {
                            continue;
                        };
                        if let Some((lb, le)) = last
                            && (b < lb - EPS || e < le - EPS)
                        {
                            out.push(format!(
                                "{who} {corner}: faster at {t} °C than colder ({v:.1} V)"
                            ));
                        }
                        last = Some((b, e));
                    }
                    if corner == Corner::Max
                        && let Some(b25) = t25
                    {
                        for &t in temps.iter().filter(|t| **t < 25.0) {
                            if let (Some(b), _) = at(lib, p, a, corner, v, t)
                                && b < b25 - EPS
                            {
                                out.push(format!(
                                    "{who}: guarantee at {t} °C below the 25 °C column ({v:.1} V)"
                                ));
                            }
                        }
                    }
                }
            }
            // the guarantee between two columns is never below either of them
            for col in &arc.worst {
                let s = &col.series;
                for w in 0..s.vcc_v.len().saturating_sub(1) {
                    for k in 1..10 {
                        let v = s.vcc_v[w] + (s.vcc_v[w + 1] - s.vcc_v[w]) * k as f64 / 10.0;
                        let (Some(b), _) = at(lib, p, a, Corner::Max, v, col.temp_c) else {
                            continue;
                        };
                        let need = match s.bound {
                            Bound::Upper => s.ns[w].max(s.ns[w + 1]),
                            Bound::Lower => s.ns[w].min(s.ns[w + 1]),
                        };
                        if b < need - EPS {
                            out.push(format!(
                                "{who}: {b} at {v:.2} V, {} °C is below the columns around it ({need})",
                                col.temp_c
                            ));
                        }
                    }
                }
                // and at a column it is never below the column
                for (i, &v) in s.vcc_v.iter().enumerate() {
                    let (Some(b), _) = at(lib, p, a, Corner::Max, v, col.temp_c) else {
                        continue;
                    };
                    if col.covers(col.temp_c) && b < s.ns[i] - EPS {
                        out.push(format!("{who}: {b} below its column {} at {v} V", s.ns[i]));
                    }
                }
            }
        }
    }
    out
}

#[test]
fn every_builtin_row_is_monotone_and_never_below_its_columns() {
    let lib = Library::builtin();
    let all: Vec<usize> = (0..lib.parts.len()).collect();
    let v = violations(&lib, &all);
    assert!(
        v.is_empty(),
        "{} violations:\n{}",
        v.len(),
        v[..v.len().min(40)].join("\n")
    );
}

#[test]
fn a_user_folder_with_an_unruly_row_is_made_monotone() {
    // a row that rises with supply between two columns and a hot column below the cold one:
    // the guaranteed value takes the envelope that never passes a published value
    let dir = std::env::temp_dir().join(format!("slackmeter-monotone-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    std::fs::write(
        dir.join("odd.toml"),
        r#"
[[part]]
type = "ODD1"
family = "74HC"
function = "a made-up part with unruly rows"
source = "test"
status = "from-memory"
load_pf = 50
vcc_v = [2.0, 3.0, 4.5, 6.0]
[[part.arc]]
name = "A->Y"
kind = "delay"
typ_ns = [30, 12, 14, 9]
max_ns = { 25 = [90, 20, 30, 15], 85 = [80, 25, 25, 14] }
min_ns = { 25 = [3, 4, 2, 2] }
[[part.arc]]
name = "D->CLK"
kind = "setup"
limit_ns = { 25 = [10, 12, 8, 8] }
"#,
    )
    .unwrap();
    let lib = Library::with_user_dir(&dir).unwrap();
    let _ = std::fs::remove_dir_all(&dir);
    let p = lib.part_index("ODD1").unwrap();
    let v = violations(&lib, &[p]);
    assert!(v.is_empty(), "{}", v.join("\n"));
    // between 3.0 and 4.5 V the 4.5 V column (30) is higher than the 3.0 V one (20): both apply
    let (b, _) = at(&lib, p, 0, Corner::Max, 3.5, 25.0);
    assert_eq!(b, Some(30.0));
}

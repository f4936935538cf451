//! The budget engine checked against published values: data-sheet columns, held-out vendor
//! columns, clock pulse widths, the published counter cascade rule, and the worked example of
//! the clock plan. Sources are named beside each check; docs/REFERENCES.md lists each value with
//! its source and status (seen / secondary / from memory).

use slackmeter::budget::derate::{self, Conditions, Corner, Notes, Value};
use slackmeter::budget::library::{ArcKind, BUILTIN_FILES, Library};
use slackmeter::budget::solver::{HoldStatus, LimitKind, Phase};
use slackmeter::budget::{ClockInput, Design, OperatingPoint, solve};
use slackmeter::diag::Source;

fn design(lib: &Library, text: &str) -> Design {
    Design::parse(Source::new("test.toml", text.to_string()), lib)
        .unwrap_or_else(|e| panic!("{e:?}"))
}

fn op(vcc_v: f64, temp_c: f64) -> OperatingPoint {
    OperatingPoint {
        vcc_v,
        section_vcc_v: Default::default(),
        temp_c,
        corner: Corner::Max,
    }
}

fn value(
    lib: &Library,
    part: &str,
    arc: &str,
    kind: ArcKind,
    corner: Corner,
    vcc_v: f64,
    temp_c: f64,
) -> Value {
    let p = lib
        .part_index(part)
        .unwrap_or_else(|| panic!("{part} missing"));
    let a = lib.parts[p]
        .arc(arc, kind)
        .unwrap_or_else(|| panic!("{part} {arc} missing"));
    let c = Conditions {
        vcc_v,
        temp_c,
        load_pf: None,
    };
    derate::eval(lib, p, a, corner, &c)
}

/// The guaranteed maximum (or limit) of an arc.
fn max_at(lib: &Library, part: &str, arc: &str, kind: ArcKind, vcc_v: f64, temp_c: f64) -> f64 {
    value(lib, part, arc, kind, Corner::Max, vcc_v, temp_c)
        .ns
        .unwrap()
}

/// Library with the built-in files plus one extra file (its parts replace built-ins by type).
fn lib_with(extra: &str) -> Library {
    let mut sources: Vec<Source> = BUILTIN_FILES
        .iter()
        .map(|(n, t)| Source::new(*n, *t))
        .collect();
    sources.push(Source::new("holdout.toml", extra.to_string()));
    Library::from_sources(&sources).unwrap()
}

fn one_arc_part(ty: &str, arc: &str, vcc: &str, max: &str) -> String {
    format!(
        "[[part]]\ntype = \"{ty}\"\nfamily = \"74HC\"\nfunction = \"held-out copy\"\nsource = \"test\"\n\
status = \"seen\"\nload_pf = 50\ntemp_min_c = -55\nvcc_v = {vcc}\n[[part.arc]]\nname = \"{arc}\"\nkind = \"delay\"\nmax_ns = {max}\n"
    )
}

/// What leaving one supply column out of a row gives at that column: (guaranteed, estimate,
/// the estimate's stated error range in %). The held-out part replaces the built-in one, so
/// neither the rule nor the family fit sees the column.
fn holdout(ty: &str, arc: &str, vcc: &str, max: &str, at_v: f64, t: f64) -> (f64, f64, (f64, f64)) {
    let lib = lib_with(&one_arc_part(ty, arc, vcc, max));
    let v = value(&lib, ty, arc, ArcKind::Delay, Corner::Max, at_v, t);
    (v.ns.unwrap(), v.est_ns.unwrap(), v.est_err_pct.unwrap())
}

#[test]
fn a_vendors_3v_column_is_never_undercut_by_the_guaranteed_rule() {
    // onsemi MC74HC161A/D, AC electrical characteristics (seen): the 3.0 V column of each row,
    // held out and predicted from the 2.0, 4.5 and 6.0 V columns. The guaranteed rule takes
    // the 2.0 V column; the estimate's miss lies inside its stated error range.
    let rows = [
        // (arc, [-55..25], [85], [125]) as 2.0 / 3.0 / 4.5 / 6.0 V, the larger of tPLH/tPHL
        (
            "CLK->Q",
            [145.0, 100.0, 22.0, 18.0],
            [185.0, 135.0, 25.0, 20.0],
            [220.0, 150.0, 30.0, 23.0],
        ),
        (
            "CET->TC",
            [135.0, 100.0, 18.0, 15.0],
            [175.0, 130.0, 20.0, 16.0],
            [210.0, 160.0, 22.0, 20.0],
        ),
        (
            "CLR->Q",
            [145.0, 100.0, 20.0, 17.0],
            [185.0, 135.0, 22.0, 19.0],
            [220.0, 150.0, 25.0, 21.0],
        ),
    ];
    for (arc, a, b, c) in rows {
        let max = format!(
            "{{ \"-55..25\" = [{}, {}, {}], 85 = [{}, {}, {}], 125 = [{}, {}, {}] }}",
            a[0], a[2], a[3], b[0], b[2], b[3], c[0], c[2], c[3]
        );
        for (t, col) in [(25.0, a), (85.0, b), (125.0, c)] {
            let (g, e, (lo, hi)) = holdout("74HC161/onsemi", arc, "[2.0, 4.5, 6.0]", &max, 3.0, t);
            let miss = 100.0 * (e / col[1] - 1.0);
            println!(
                "MC74HC161A {arc} at 3.0 V, {t} °C: data sheet {} ns; guaranteed {g} ns; estimate {e:.1} ns ({miss:+.1} %, stated {lo:+.0} … {hi:+.0} %)",
                col[1]
            );
            assert!(g >= col[1], "the guaranteed value undercuts the data sheet");
            assert_eq!(g, col[0], "the 2.0 V column is the slower neighbour");
            assert!(
                (lo..=hi).contains(&miss),
                "the stated error {lo:.0} … {hi:.0} % does not cover the miss {miss:.1} %"
            );
        }
    }
    // and at 3.3 V (a common supply) with the library's own rows: the 3.0 V column applies
    let lib = Library::builtin();
    assert_eq!(
        max_at(&lib, "74HC161/onsemi", "CLK->Q", ArcKind::Delay, 3.3, 25.0),
        100.0
    );
    // f_max: 15 MHz guaranteed at 3.0 V, so the shortest period at 3.3 V is 1/15 MHz
    let p = max_at(&lib, "74HC161/onsemi", "CLK", ArcKind::Fmax, 3.3, 25.0);
    assert!((p - 1000.0 / 15.0).abs() < 1e-9, "{p}");
}

#[test]
fn held_out_4v5_columns_are_guaranteed_safely_and_estimated_within_the_stated_error() {
    // Predict each 4.5 V column from the 2.0 and 6.0 V columns of its row.
    let cases = [
        // NXP 74HC04-Q100/74HCT04-Q100 Rev. 2 (2013), A→Y max: 85/17/14, 105/21/18, 130/26/22
        (
            "74HC04/nxp",
            "A->Y",
            "{ 25 = [85, 14], 85 = [105, 18], 125 = [130, 22] }",
            [85.0, 105.0, 130.0],
            [17.0, 21.0, 26.0],
        ),
        // Philips 74HC/HCT30 (Dec 1990), max: 130/26/22, 165/33/28, 195/39/33
        (
            "74HC30/nxp",
            "A->Y",
            "{ 25 = [130, 22], 85 = [165, 28], 125 = [195, 33] }",
            [130.0, 165.0, 195.0],
            [26.0, 33.0, 39.0],
        ),
        // TI CD74HC574 SCHS183E, CLK→Q max: 165/33/28, 205/41/35, 250/50/43
        (
            "74HC574/ti-cd",
            "CLK->Q",
            "{ 25 = [165, 28], 85 = [205, 35], 125 = [250, 43] }",
            [165.0, 205.0, 250.0],
            [33.0, 41.0, 50.0],
        ),
    ];
    for (ty, arc, max, at2, want) in cases {
        for (i, t) in [25.0, 85.0, 125.0].into_iter().enumerate() {
            let (g, e, (lo, hi)) = holdout(ty, arc, "[2.0, 6.0]", max, 4.5, t);
            let miss = 100.0 * (e / want[i] - 1.0);
            println!(
                "{ty} {arc} at 4.5 V, {t} °C: data sheet {} ns, guaranteed {g} ns, estimate {e:.2} ns ({miss:+.1} %)",
                want[i]
            );
            assert_eq!(
                g, at2[i],
                "between 2.0 and 6.0 V the 2.0 V column is guaranteed"
            );
            assert!(g >= want[i]);
            assert!(
                (lo..=hi).contains(&miss),
                "{miss:.1} % outside {lo:.0} … {hi:.0} %"
            );
        }
    }
}

#[test]
fn held_out_6v_columns_are_estimated_within_the_stated_error() {
    // Predict 6.0 V from the 2.0 and 4.5 V columns (above the highest column): the guaranteed
    // rule takes 4.5 V, the estimate follows the law.
    let cases = [
        // NXP 74HC04-Q100 Rev. 2 (2013)
        (
            "74HC04/nxp",
            "A->Y",
            "{ 25 = [85, 17], 85 = [105, 21], 125 = [130, 26] }",
            [17.0, 21.0, 26.0],
            [14.0, 18.0, 22.0],
        ),
        // TI CD74HC164 SCHS155E, CLK→Q max: 170/34/29, 212/43/36, 255/51/43
        (
            "74HC164/ti-cd",
            "CLK->Q",
            "{ 25 = [170, 34], 85 = [212, 43], 125 = [255, 51] }",
            [34.0, 43.0, 51.0],
            [29.0, 36.0, 43.0],
        ),
    ];
    for (ty, arc, max, at45, want) in cases {
        for (i, t) in [25.0, 85.0, 125.0].into_iter().enumerate() {
            let (g, e, (lo, hi)) = holdout(ty, arc, "[2.0, 4.5]", max, 6.0, t);
            let miss = 100.0 * (e / want[i] - 1.0);
            println!(
                "{ty} {arc} at 6.0 V, {t} °C: data sheet {}, estimate {e:.2} ({miss:+.1} %)",
                want[i]
            );
            assert_eq!(g, at45[i]);
            assert!(
                (lo..=hi).contains(&miss),
                "{miss:.1} % outside {lo:.0} … {hi:.0} %"
            );
        }
    }
}

#[test]
fn seen_rows_alone_fit_the_reference_alpha_power_range() {
    // REFERENCES.md §1 (computed observation): fitting t = k·V/(V−Vt)^α to the 74HC04 and 74HC30
    // maxima at 2.0/4.5/6.0 V gives α ≈ 1.4–1.55, Vt ≈ 0.9–1.4 V, residuals of a few per cent.
    // NXP 74HC04-Q100 Rev. 2 (2013); Philips 74HC/HCT30 (Dec 1990).
    let v = vec![2.0, 4.5, 6.0];
    let rows = vec![
        (v.clone(), vec![85.0, 17.0, 14.0]),
        (v.clone(), vec![105.0, 21.0, 18.0]),
        (v.clone(), vec![130.0, 26.0, 22.0]),
        (v.clone(), vec![130.0, 26.0, 22.0]),
        (v.clone(), vec![165.0, 33.0, 28.0]),
        (v.clone(), vec![195.0, 39.0, 33.0]),
    ];
    let s = derate::fit_shape(&rows, "seen").unwrap();
    println!(
        "alpha {:.3}, Vt {:.3} V, rms {:.2} %, max {:.2} %",
        s.alpha, s.vt_v, s.rms_pct, s.max_pct
    );
    // α and Vt trade off along a shallow valley (higher α goes with higher Vt). Check the
    // published pairing: with α held at 1.4 and at 1.55, the best Vt lands in 0.9–1.4 V (with a
    // little tolerance) and fits to a few per cent; and our free optimum fits at least as well.
    for alpha in [1.4, 1.55] {
        let (vt, (rms, max)) = (0..=190)
            .map(|i| i as f64 * 0.01)
            .map(|vt| (vt, derate::error_of(&rows, alpha, vt)))
            .min_by(|a, b| a.1.0.total_cmp(&b.1.0))
            .unwrap();
        println!("α held at {alpha}: best Vt {vt:.2} V, rms {rms:.2} %, max {max:.2} %");
        assert!(
            (0.8..=1.5).contains(&vt),
            "Vt {vt} outside the published 0.9–1.4 V"
        );
        // found when written: worst 5.8 % at α 1.4 (Vt 1.43 V), 7.7 % at α 1.55 (Vt 1.29 V)
        assert!(max < 8.5, "a few per cent expected, got {max:.1} %");
        assert!(s.rms_pct <= rms + 1e-9);
    }
    assert!(s.max_pct < 5.0, "residual {} %", s.max_pct);
    assert!(
        s.alpha >= 1.0 && s.vt_v < 2.0,
        "physical: α ≥ 1, Vt below the lowest column"
    );
}

#[test]
fn temperature_columns_are_reproduced_exactly() {
    let lib = Library::builtin();
    // Philips 74HC/HCT30 (Dec 1990), max at 25 / 85 / 125 °C for 2.0 / 4.5 / 6.0 V
    let hc30 = [
        [130.0, 26.0, 22.0],
        [165.0, 33.0, 28.0],
        [195.0, 39.0, 33.0],
    ];
    // TI CD74HC574 SCHS183E, setup D→CLK (the data sheet's min limit)
    let hc574_su = [[60.0, 12.0, 10.0], [75.0, 15.0, 13.0], [90.0, 18.0, 15.0]];
    // onsemi MC74HC161A/D, CLK→Q, larger of tPLH/tPHL at 2.0/3.0/4.5/6.0 V
    let hc161 = [
        [145.0, 100.0, 22.0, 18.0],
        [185.0, 135.0, 25.0, 20.0],
        [220.0, 150.0, 30.0, 23.0],
    ];
    for (ti, t) in [25.0, 85.0, 125.0].into_iter().enumerate() {
        for (vi, v) in [2.0, 4.5, 6.0].into_iter().enumerate() {
            let got = value(
                &lib,
                "74HC30/nxp",
                "A->Y",
                ArcKind::Delay,
                Corner::Max,
                v,
                t,
            );
            assert_eq!(got.ns, Some(hc30[ti][vi]), "74HC30 {v} V {t} °C");
            // on a column the estimate is the data sheet too
            assert!((got.est_ns.unwrap() - hc30[ti][vi]).abs() < 1e-9);
            let got = max_at(&lib, "74HC574/ti-cd", "D->CLK", ArcKind::Setup, v, t);
            assert_eq!(got, hc574_su[ti][vi], "setup {v} V {t} °C");
        }
        for (vi, v) in [2.0, 3.0, 4.5, 6.0].into_iter().enumerate() {
            let got = max_at(&lib, "74HC161/onsemi", "CLK->Q", ArcKind::Delay, v, t);
            assert_eq!(got, hc161[ti][vi], "74HC161 {v} V {t} °C");
        }
    }
    // between temperature columns the hotter one is guaranteed; the estimate lies between
    let mid = value(
        &lib,
        "74HC30/nxp",
        "A->Y",
        ArcKind::Delay,
        Corner::Max,
        4.5,
        55.0,
    );
    assert_eq!(mid.ns, Some(33.0));
    let e = mid.est_ns.unwrap();
    assert!(e > 26.0 && e < 33.0, "{e}");
    // onsemi's first column is −55 to 25 °C: it covers −40 °C
    assert_eq!(
        max_at(&lib, "74HC161/onsemi", "CLK->Q", ArcKind::Delay, 4.5, -40.0),
        22.0
    );
}

#[test]
fn corrected_library_values_match_their_tables() {
    let lib = Library::builtin();
    let typ = |p: &str, a: &str, v: f64| {
        value(&lib, p, a, ArcKind::Delay, Corner::Typ, v, 25.0)
            .ns
            .unwrap()
    };
    let max = |p: &str, a: &str, v: f64, t: f64| max_at(&lib, p, a, ArcKind::Delay, v, t);
    // NXP 74HC_HCT86 Rev. 4 (2015), Table 7: typ 39 / 14 / 11 ns; max 120/24/20 | 150/30/26 | 180/36/31
    for (v, t) in [(2.0, 39.0), (4.5, 14.0), (6.0, 11.0)] {
        assert_eq!(typ("74HC86/nxp", "A->Y", v), t);
    }
    assert_eq!(max("74HC86/nxp", "A->Y", 4.5, 125.0), 36.0);
    // TI CD74HC14 (SCHS129), HC types: 135/27/23 | 170/34/29 | 205/41/35 ns
    for (v, t, want) in [(2.0, 25.0, 135.0), (4.5, 85.0, 34.0), (6.0, 125.0, 35.0)] {
        assert_eq!(max("74HC14/ti-cd", "A->Y", v, t), want);
    }
    // Philips HC typicals quoted by a SPICE library (secondary): 74HC32 22/8/6, 74HC138 E→Y
    // 47/17/14, 74HC157 S→Y 41/15/12, 74HC161 CP→TC 69/25/20 and CET→TC 33/12/10
    assert_eq!(typ("74HC32/nxp", "A->Y", 4.5), 8.0);
    assert_eq!(typ("74HC138/nxp", "E->Y", 4.5), 17.0);
    assert!(typ("74HC138/nxp", "E->Y", 4.5) > typ("74HC138/nxp", "A->Y", 4.5));
    assert_eq!(typ("74HC157/nxp", "S->Y", 2.0), 41.0);
    assert_eq!(typ("74HC161/nxp", "CLK->TC", 6.0), 20.0);
    assert_eq!(typ("74HC161/nxp", "CET->TC", 4.5), 12.0);
    // onsemi MC74HC161A/D: Enable T → RCO, the larger of tPLH 110/60/16/14 and tPHL 135/100/18/15
    assert_eq!(max("74HC161/onsemi", "CET->TC", 3.0, 25.0), 100.0);
    // one vendor per row: the generic 74HC161 is the worst of the variants (TI SN74HC161 CLK→Q
    // 41 ns at 4.5 V, 25 °C, secondary, against onsemi's 22 ns)
    assert_eq!(max("74HC161", "CLK->Q", 4.5, 25.0), 41.0);
    assert_eq!(max("74HC161/onsemi", "CLK->Q", 4.5, 25.0), 22.0);
    // generic 74HC08: TI CD74HC08 18 ns, onsemi MC74HC08A 15 ns, TI SN74HC08 20 ns (secondary)
    assert_eq!(max("74HC08", "A->Y", 5.0, 25.0), 20.0);
    // generic 74HC04: NXP 74HC04-Q100 Rev. 2 17 ns, TI SN74HC04 19 ns (4.5 V, 25 °C, secondary);
    // generic 74HC32: TI SN74HC32 20 ns (secondary) over the NXP row (from memory)
    assert_eq!(max("74HC04/nxp", "A->Y", 4.5, 25.0), 17.0);
    assert_eq!(max("74HC04", "A->Y", 4.5, 25.0), 19.0);
    assert_eq!(max("74HC32", "A->Y", 4.5, 25.0), 20.0);
    // TI SCHS183E: CD74HC574 typical CP→Q 15 ns at 5 V, 15 pF (the library gives it at 50 pF
    // on the guaranteed row's shape, so only its value at 5 V, 15 pF is the table's)
    let p = lib.part_index("74HC574/ti-cd").unwrap();
    let a = lib.parts[p].arc("CLK->Q", ArcKind::Delay).unwrap();
    let c15 = Conditions {
        vcc_v: 5.0,
        temp_c: 25.0,
        load_pf: Some(15.0),
    };
    let t15 = derate::eval(&lib, p, a, Corner::Typ, &c15);
    assert!((t15.est_ns.unwrap() - 15.0).abs() < 1e-9, "{t15:?}");
    assert!(t15.notes.has(Notes::TYP_FOLLOWS_MAX));
    // Philips 74HC245 Rev. 03 Table 9 gives no −40…125 °C row (not reached): hot, it is flagged
    let hot = value(
        &lib,
        "74HC245/nxp",
        "A->B",
        ArcKind::Delay,
        Corner::Max,
        4.5,
        100.0,
    );
    assert!(hot.notes.has(Notes::TEMP_NOT_COVERED), "{hot:?}");
    assert_eq!(hot.ns, Some(23.0), "the hottest column is used, said so");
    // AT28C256 0006M §5: −15 industrial (−40…85 °C) and military; −20 military only
    let at = |t: &str| {
        let p = &lib.parts[lib.part_index(t).unwrap()];
        (p.temp_min_c, p.temp_max_c)
    };
    assert_eq!(at("AT28C256-15/ind"), (-40.0, 85.0));
    assert_eq!(at("AT28C256-15/mil"), (-55.0, 125.0));
    assert_eq!(at("AT28C256-20"), (-55.0, 125.0));
    // Atmel AT27C256R: every grade commercial and industrial, tACC 70 ns for −70
    assert_eq!(at("AT27C256R-70/ind"), (-40.0, 85.0));
    assert_eq!(max("AT27C256R-70/com", "ADDR->D", 5.0, 25.0), 70.0);
}

#[test]
fn load_slopes_come_from_two_load_tables() {
    let lib = Library::builtin();
    let with_load = |part: &str, arc: &str, v: f64, load: f64| {
        let p = lib.part_index(part).unwrap();
        let a = lib.parts[p].arc(arc, ArcKind::Delay).unwrap();
        let c = Conditions {
            vcc_v: v,
            temp_c: 25.0,
            load_pf: Some(load),
        };
        derate::eval(&lib, p, a, Corner::Max, &c)
    };
    // TI SN74HC240 SCLS128H: max tpd 20 ns at 50 pF and 30 ns at 150 pF (4.5 V, 25 °C), 100 and
    // 150 ns at 2 V: the HC slope reproduces the 150 pF column of the same part
    for (v, at50, at150) in [(2.0, 100.0, 150.0), (4.5, 20.0, 30.0)] {
        let d = with_load("74HC240/ti-sn", "A->Y", v, 150.0).ns.unwrap();
        assert!((d - at150).abs() < 1e-9, "{v} V: {d} (50 pF: {at50})");
    }
    // Fairchild DM74LS161A: max tPHL CLK→Q 27 ns at 15 pF, 38 ns at 50 pF (5 V, 25 °C)
    let d = with_load("74LS161/fairchild", "CLK->Q", 5.0, 50.0)
        .ns
        .unwrap();
    assert!((d - 38.0).abs() < 0.01, "{d}");
    // 74HCT: no two-load table was found, so a load is reported as not modelled
    let v = with_load("74HCT245/nxp", "A->B", 4.5, 150.0);
    assert!(v.notes.has(Notes::LOAD_NOT_MODELLED));
}

const CHAIN: &str = r#"
[design]
name = "register to register through two inverters"
[[part]]
ref = "U1"
type = "74HC574/ti-cd"
[[part]]
ref = "U2"
type = "74HC04/nxp"
[[part]]
ref = "U3"
type = "74HC574/ti-cd"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[arc]]
from = "q"
to = "n1"
part = "U2"
arc = "A->Y"
[[arc]]
from = "n1"
to = "n2"
part = "U2"
arc = "A->Y"
[[capture]]
name = "U3 D"
signal = "n2"
edge = "EDGE"
part = "U3"
check = "D->CLK"
"#;

#[test]
fn chain_of_real_parts_sums_data_sheet_maxima() {
    let lib = Library::builtin();
    // TI CD74HC574 SCHS183E (CLK→Q 33/41/50 at 4.5 V; 28/35/43 at 6 V; setup 12/15/18; 10/13/15;
    // clock pulse width 16 ns at 4.5 V, 25 °C)
    // NXP 74HC04-Q100 Rev. 2 (2013) (A→Y 17/21/26 at 4.5 V; 14/18/22 at 6 V)
    let cases = [
        (4.5, 25.0, 33.0 + 17.0 + 17.0 + 12.0),
        (4.5, 85.0, 41.0 + 21.0 + 21.0 + 15.0),
        (4.5, 125.0, 50.0 + 26.0 + 26.0 + 18.0),
        (5.0, 25.0, 33.0 + 17.0 + 17.0 + 12.0),
        (6.0, 25.0, 28.0 + 14.0 + 14.0 + 10.0),
        (6.0, 125.0, 43.0 + 22.0 + 22.0 + 15.0),
    ];
    let same_edge = design(&lib, &CHAIN.replace("EDGE", "rise"));
    let opposite = design(&lib, &CHAIN.replace("EDGE", "fall"));
    for (v, t, want) in cases {
        let b = solve(&same_edge, &lib, &op(v, t), None, None);
        assert!(
            (b.period_required_ns - want).abs() < 1e-9,
            "{v} V {t} °C: P {}",
            b.period_required_ns
        );
        assert_eq!(b.limits.period.binds, LimitKind::Path);
        assert!(
            (b.fmax_50_hz - 1e9 / (2.0 * b.low_required_ns.max(b.high_required_ns)).max(want))
                .abs()
                < 1e-3
        );
        let path = b.critical_paths.period.as_ref().unwrap();
        assert_eq!(path.steps.len(), 5, "clock, CLK->Q, 2 inverters, setup");
        let b = solve(&opposite, &lib, &op(v, t), None, None);
        // launched on ↑, captured on ↓: the high phase must hold it; f_max at 50 % is 1/(2H)
        assert!((b.high_required_ns - want).abs() < 1e-9);
        assert!((b.fmax_50_hz - 1e9 / (2.0 * want)).abs() < 1e-3);
    }
}

#[test]
fn the_574_pulse_width_clamps_the_best_duty() {
    // TI CD74HC574 SCHS183E: clock pulse width tW ≥ 16 ns at 4.5 V (80 at 2 V, 14 at 6 V), 25 °C.
    // A path only the high phase constrains would give d* = 1 (a low phase of 0 ns); the
    // registers need a low phase of tW.
    let lib = Library::builtin();
    let d = design(&lib, &CHAIN.replace("EDGE", "fall"));
    for (v, tw) in [(2.0, 80.0), (4.5, 16.0), (5.0, 16.0), (6.0, 14.0)] {
        let b = solve(&d, &lib, &op(v, 25.0), None, None);
        assert_eq!(b.limits.low.binds, LimitKind::PulseWidth, "{v} V");
        assert_eq!(b.low_required_ns, tw);
        let h = b.high_required_ns;
        assert!(
            (b.best_duty - h / (h + tw)).abs() < 1e-12,
            "{v} V: d* {}",
            b.best_duty
        );
        assert!(b.best_duty < 1.0);
    }
    // the 25 °C column is the only one seen: at 85 °C it is flagged as not guaranteed
    let hot = solve(&d, &lib, &op(4.5, 85.0), None, None);
    assert!(!hot.guaranteed);
}

#[test]
fn a_clocked_part_without_a_pulse_width_is_named() {
    // Regression: TI SN74HCT574 (SCLS177H) rows in the library give no tW; a register pair of
    // them bounds no phase by a pulse width, and the budget says so instead of staying silent.
    let lib = Library::builtin();
    let d = design(
        &lib,
        &CHAIN
            .replace("EDGE", "fall")
            .replace("74HC574/ti-cd", "74HCT574/ti-sn"),
    );
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert_eq!(b.limits.low.binds, LimitKind::None);
    assert!(
        b.warnings
            .iter()
            .any(|w| w.starts_with("74HCT574/ti-sn: the library gives no minimum CLK pulse width")),
        "{:?}",
        b.warnings
    );
    let d = design(&lib, &CHAIN.replace("EDGE", "fall"));
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert!(
        !b.warnings
            .iter()
            .any(|w| w.contains("no minimum CLK pulse width"))
    );
}

#[test]
fn clock_plan_of_the_worked_example_through_the_solver() {
    // Invented worked example, docs/REFERENCES.md §11: L = 500 ns, H = 125 ns → d* = 0.20,
    // T_min = 625 ns (1.6 MHz); at 50 % duty T_min = 1000 ns (1.0 MHz).
    let lib = Library::builtin();
    let d = design(&lib, include_str!("designs/worked-example.toml"));
    let b = solve(
        &d,
        &lib,
        &op(5.0, 25.0),
        Some(ClockInput {
            freq_hz: 1.6e6,
            duty: 0.2,
        }),
        Some(0.3),
    );
    assert!((b.low_required_ns - 500.0).abs() < 1e-9);
    assert!((b.high_required_ns - 125.0).abs() < 1e-9);
    assert!((b.best_duty - 0.20).abs() < 1e-12);
    assert!((b.min_period_best_duty_ns - 625.0).abs() < 1e-9);
    assert!((b.fmax_best_duty_hz - 1.6e6).abs() < 1e-3);
    assert!((b.min_period_50_ns - 1000.0).abs() < 1e-9);
    assert!((b.fmax_50_hz - 1.0e6).abs() < 1e-3);
    // T_min(0.3) = max(500/0.7, 125/0.3) = 714.29 ns
    let at = b.at_duty.as_ref().unwrap();
    assert!((at.min_period_ns - 500.0 / 0.7).abs() < 1e-9);
    // at exactly f_max and d*, both phases have zero slack
    let c = b.clock.as_ref().unwrap();
    assert!(c.low_slack_ns.abs() < 1e-6 && c.high_slack_ns.abs() < 1e-6);
}

const CASCADE: &str = r#"
[design]
name = "two-counter cascade"
[[part]]
ref = "U1"
type = "TYPE"
[[part]]
ref = "U2"
type = "TYPE"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->TC"
to = "tc"
[[capture]]
name = "U2 count enable"
signal = "tc"
edge = "rise"
part = "U2"
check = "CEP->CLK"
"#;

#[test]
fn counter_cascade_reproduces_the_published_fmax_rule() {
    // Philips 74HC/HCT161 (Dec 1990): fmax = 1 / (tpd CP→TC + tsu CEP→CP) for cascaded counters.
    // The solver must reproduce the rule from the library's own arc values at each condition.
    let lib = Library::builtin();
    for (ty, v, t) in [
        ("74HC161", 4.5, 25.0),
        ("74HC161", 6.0, 85.0),
        ("74HC161", 3.3, 25.0),
        ("74HC161/nxp", 3.3, 25.0),
        ("74LS161", 5.0, 25.0),
    ] {
        let d = design(&lib, &CASCADE.replace("TYPE", ty));
        let b = solve(&d, &lib, &op(v, t), None, None);
        let tpd = max_at(&lib, ty, "CLK->TC", ArcKind::Delay, v, t);
        let tsu = max_at(&lib, ty, "CEP->CLK", ArcKind::Setup, v, t);
        let rule_hz = 1e9 / (tpd + tsu);
        println!(
            "{ty} at {v} V {t} °C: tpd {tpd:.2} + tsu {tsu:.2} → {:.3} MHz",
            rule_hz / 1e6
        );
        assert!(
            (b.fmax_50_hz - rule_hz).abs() / rule_hz < 1e-12,
            "{ty}: {} vs {rule_hz}",
            b.fmax_50_hz
        );
    }
    // Renesas HD74LS161A Rev. 2.00: CLK→RCO max 35 ns (seen); ENP setup 20 ns (from memory)
    let d = design(&lib, &CASCADE.replace("TYPE", "74LS161"));
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert!((b.period_required_ns - 55.0).abs() < 1e-9);
}

#[test]
fn a_part_fmax_limits_the_period() {
    // onsemi MC74HC161A/D: f_max ≥ 30 MHz at 4.5 V, 35 MHz at 6.0 V (−55…25 °C). A counter
    // feeding itself through nothing would otherwise be allowed any speed.
    let lib = Library::builtin();
    let d = design(
        &lib,
        r#"
[design]
name = "counter alone"
[[part]]
ref = "U1"
type = "74HC161/onsemi"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[capture]]
signal = "q"
edge = "rise"
setup = "0 ns"
"#,
    );
    for (v, mhz) in [(4.5, 30.0), (5.0, 30.0), (6.0, 35.0)] {
        let b = solve(&d, &lib, &op(v, 25.0), None, None);
        let q = max_at(&lib, "74HC161/onsemi", "CLK->Q", ArcKind::Delay, v, 25.0);
        assert!(q < 1000.0 / mhz, "the path alone would allow more");
        assert_eq!(b.limits.period.binds, LimitKind::PartFmax);
        assert!(
            (b.fmax_50_hz - mhz * 1e6).abs() < 1e-3,
            "{v} V: {}",
            b.fmax_50_hz
        );
    }
}

#[test]
fn added_decoder_and_xor_rows_match_their_tables() {
    let lib = Library::builtin();
    let max = |p: &str, a: &str, v: f64, t: f64| max_at(&lib, p, a, ArcKind::Delay, v, t);
    // TI SN74HCT139 SCLS066D, switching characteristics (CL 50 pF): tpd A or B→Y and G→Y max
    // 34 / 30 ns at 4.5 / 5.5 V, 25 °C; SN74HCT139 (−40…85 °C) 43 / 40 ns
    for arc in ["A->Y", "E->Y"] {
        assert_eq!(max("74HCT139/ti-sn", arc, 4.5, 25.0), 34.0);
        assert_eq!(max("74HCT139/ti-sn", arc, 5.5, 25.0), 30.0);
        assert_eq!(max("74HCT139/ti-sn", arc, 5.5, 85.0), 40.0);
        // −40 °C is covered by the −40…85 °C column, never by the 25 °C one
        assert_eq!(max("74HCT139/ti-sn", arc, 4.5, -40.0), 43.0);
        // between the columns the 4.5 V one holds
        assert_eq!(max("74HCT139", arc, 5.0, 25.0), 34.0);
    }
    // Renesas HD74LS86 Rev. 2.00, switching characteristics (5 V, 25 °C, CL 15 pF, RL 2 kΩ):
    // the slowest row is tPLH with the other input high, typ 20, max 30 ns
    assert_eq!(max("74LS86/renesas", "A->Y", 5.0, 25.0), 30.0);
    let typ = value(
        &lib,
        "74LS86",
        "A->Y",
        ArcKind::Delay,
        Corner::Typ,
        5.0,
        25.0,
    );
    assert_eq!(typ.ns, Some(20.0));
}

#[test]
fn the_ls273s_pulse_width_binds_before_its_fmax() {
    // Fairchild DM74LS273, recommended operating conditions (0…70 °C): setup 15 ns, hold 5 ns,
    // CP pulse width HIGH or LOW 20 ns, MR recovery 15 ns. Motorola SN54/74LS273 (FAST and LS
    // TTL data), AC characteristics at 25 °C: f_max 30 MHz, CP→Q 27 ns max. The generic 74LS273
    // holds both vendors' arcs: at 50 % duty the 20 ns phases allow 25 MHz, below the 30 MHz.
    let lib = Library::builtin();
    for (arc, kind, want) in [
        ("D->CLK", ArcKind::Setup, 15.0),
        ("D->CLK", ArcKind::Hold, 5.0),
        ("CLK", ArcKind::PulseWidth, 20.0),
        ("CLR->CLK", ArcKind::Setup, 15.0),
    ] {
        assert_eq!(
            max_at(&lib, "74LS273/fairchild", arc, kind, 5.0, 70.0),
            want
        );
        assert_eq!(max_at(&lib, "74LS273", arc, kind, 5.0, 25.0), want);
    }
    assert_eq!(
        max_at(&lib, "74LS273", "CLK->Q", ArcKind::Delay, 5.0, 25.0),
        27.0
    );
    let d = design(
        &lib,
        r#"
[design]
name = "register alone"
[[part]]
ref = "U1"
type = "74LS273"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[capture]]
signal = "q"
edge = "rise"
setup = "0 ns"
"#,
    );
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert_eq!(b.limits.low.binds, LimitKind::PulseWidth);
    assert_eq!(b.limits.high.binds, LimitKind::PulseWidth);
    assert!(
        (b.period_required_ns - 1000.0 / 30.0).abs() < 1e-9,
        "{}",
        b.period_required_ns
    );
    assert!((b.fmax_50_hz - 25e6).abs() < 1e-3, "{}", b.fmax_50_hz);
}

#[test]
fn hold_checks_without_minimum_delays() {
    let lib = Library::builtin();
    let d = design(&lib, &CHAIN.replace("EDGE", "rise"));
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert_eq!(b.holds.len(), 1);
    // no data sheet minimum for CLK→Q or A→Y: never reported as passed
    assert_eq!(b.holds[0].status, HoldStatus::UnknownMin);
    // a half-cycle path without a clock: the condition, not a failure (TI CD74HC574 SCHS183E
    // hold 5 ns; minima unknown, counted as 0 ns)
    let d = design(&lib, &CHAIN.replace("EDGE", "fall"));
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert_eq!(b.holds[0].status, HoldStatus::PassesIf);
    assert_eq!(b.holds[0].passes_if_phase_ns, Some(5.0));
    assert_eq!(b.holds[0].credit_phase, Some(Phase::Low));
    // with a clock whose low phase is 250 ns it passes
    let b = solve(
        &d,
        &lib,
        &op(5.0, 25.0),
        Some(ClockInput {
            freq_hz: 2e6,
            duty: 0.5,
        }),
        None,
    );
    assert_eq!(b.holds[0].status, HoldStatus::Pass);
}

#[test]
fn known_minima_decide_holds_and_a_min_override_keeps_the_derated_maximum() {
    let lib = Library::builtin();
    let text = |over: &str| {
        format!(
            r#"
[design]
name = "hold"
[[part]]
ref = "U1"
type = "74HC574/ti-cd"
[[part]]
ref = "U3"
type = "74HC574/ti-cd"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[arc]]
from = "q"
to = "d"
delay = {{ min = "3 ns", max = "4 ns" }}
[[capture]]
signal = "d"
edge = "rise"
part = "U3"
check = "D->CLK"
[[override]]
part = "U1"
arc = "CLK->Q"
{over}
"#
        )
    };
    // fixed values: 3 ns early arrival vs the 5 ns hold (TI CD74HC574 SCHS183E)
    let d = design(&lib, &text("min = \"0 ns\"\nmax = \"33 ns\""));
    let b = solve(&d, &lib, &op(4.5, 25.0), None, None);
    assert_eq!(b.holds[0].status, HoldStatus::Fail);
    assert!((b.holds[0].slack_ns - (3.0 - 5.0)).abs() < 1e-9);
    // a minimum alone: the hold passes with 2 + 3 ns ≥ 5 ns, and the maximum stays derated
    // (CLK→Q 41 ns at 85 °C, 4.5 V, TI SCHS183E)
    let d = design(&lib, &text("min = \"2 ns\""));
    let b = solve(&d, &lib, &op(4.5, 85.0), None, None);
    assert_eq!(b.holds[0].status, HoldStatus::Pass);
    assert!((b.period_required_ns - (41.0 + 4.0 + 15.0)).abs() < 1e-9);
}

#[test]
fn common_clock_credit_is_off_unless_asked_and_stays_safe() {
    // a register pair behind one clock inverter (NXP 74HC04-Q100: A→Y 17 ns at 4.5 V; minimum
    // unknown, so the inverter counts 17 ns late on the launch side and 0 ns on the capture side)
    let lib = Library::builtin();
    let text = |credit: &str| {
        format!(
            r#"
[design]
name = "shared clock buffer"
[operating]
{credit}
[[part]]
ref = "U1"
type = "74HC574/ti-cd"
[[part]]
ref = "U2"
type = "74HC574/ti-cd"
[[part]]
ref = "U9"
type = "74HC04/nxp"
[[launch]]
edge = "fall"
part = "U1"
arc = "CLK->Q"
to = "q"
clock_via = [{{ part = "U9", arc = "A->Y" }}]
[[capture]]
signal = "q"
edge = "fall"
part = "U2"
check = "D->CLK"
clock_via = [{{ part = "U9", arc = "A->Y" }}]
"#
        )
    };
    let off = solve(&design(&lib, &text("")), &lib, &op(4.5, 25.0), None, None);
    let on = solve(
        &design(&lib, &text("common_clock_credit = true")),
        &lib,
        &op(4.5, 25.0),
        None,
        None,
    );
    // off: 17 (buffer, late) + 33 (CLK→Q) + 12 (setup) − 0 (buffer, early) = 62 ns
    assert!((off.period_required_ns - 62.0).abs() < 1e-9);
    // on: the shared buffer counts once on each side: 33 + 12 = 45 ns, never below the path
    // itself (TI CD74HC574 SCHS183E: CLK→Q 33, setup 12 at 4.5 V)
    assert!((on.period_required_ns - 45.0).abs() < 1e-9);
    let steps = &on.critical_paths.period.as_ref().unwrap().steps;
    assert!(steps.last().unwrap().through.contains("common clock"));
}

#[test]
fn lower_supply_is_never_faster_and_flags_what_no_column_covers() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let hi = solve(&d, &lib, &op(5.0, 25.0), None, None);
    let mid = solve(&d, &lib, &op(4.6, 25.0), None, None);
    let lo = solve(&d, &lib, &op(4.4, 25.0), None, None);
    // 4.6 and 5.0 V lie between the 4.5 and 6.0 V columns: both get the 4.5 V column
    assert_eq!(mid.low_required_ns, hi.low_required_ns);
    assert!(mid.estimate.low_required_ns > hi.estimate.low_required_ns);
    // below 4.5 V the 2.0 V columns apply (and the memories lose their only column)
    assert!(lo.low_required_ns > 2.0 * hi.low_required_ns);
    assert!(hi.in_spec && hi.guaranteed && mid.in_spec);
    assert!(!lo.in_spec && !lo.guaranteed);
    assert!(
        lo.warnings
            .iter()
            .any(|w| w.contains("OUT OF SPEC") && w.contains("AT28C256-20")),
        "{:?}",
        lo.warnings
    );
    // the EEPROM (rated 4.5–5.5 V) is out of its range; the generic 74HC04 is inside the
    // 74HC range but its TI SN74HC04 row (4.5 V only) has no column at 4.4 V: not guaranteed
    let named = |list: &[String], part: &str| list.iter().any(|p| p.ends_with(part));
    assert!(named(&lo.out_of_spec_parts, " AT28C256-20"));
    assert!(named(&lo.not_guaranteed_parts, " AT28C256-20"));
    assert!(named(&lo.not_guaranteed_parts, " 74HC04"));
    assert!(
        !named(&lo.out_of_spec_parts, " 74HC04"),
        "{:?}",
        lo.out_of_spec_parts
    );
    assert!(hi.out_of_spec_parts.is_empty() && hi.not_guaranteed_parts.is_empty());
    // a sagging far section alone costs low-phase time (the ALU sits there)
    let mut sag = op(5.0, 25.0);
    sag.section_vcc_v.insert("far".into(), 4.4);
    let s = solve(&d, &lib, &sag, None, None);
    assert!(s.low_required_ns > hi.low_required_ns);
    assert_eq!(
        s.high_required_ns, hi.high_required_ns,
        "the high-phase path has no far-section part"
    );
}

#[test]
fn typical_corner_is_faster_and_says_where_typ_is_missing() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let mut o = op(5.0, 25.0);
    let max = solve(&d, &lib, &o, None, None);
    o.corner = Corner::Typ;
    let typ = solve(&d, &lib, &o, None, None);
    assert!(typ.fmax_50_hz > max.fmax_50_hz);
    assert!(typ.warnings.iter().any(|w| w.contains("no typical value")));
    assert!(
        typ.warnings
            .iter()
            .any(|w| w.contains("follows the guaranteed row"))
    );
    // a typical given at one supply follows the guaranteed row: at 2 V it is no longer the 5 V
    // value (Philips 74HC/HCT283: CIN→Σ typ 23 ns at 5 V, 15 pF)
    let t2 = value(
        &lib,
        "74HC283/nxp",
        "CIN->S",
        ArcKind::Delay,
        Corner::Typ,
        2.0,
        25.0,
    );
    let t5 = value(
        &lib,
        "74HC283/nxp",
        "CIN->S",
        ArcKind::Delay,
        Corner::Typ,
        5.0,
        25.0,
    );
    assert!(t2.ns.unwrap() > 3.0 * t5.ns.unwrap(), "{t2:?} {t5:?}");
}

#[test]
fn phases_are_classified_by_edges() {
    use slackmeter::budget::design::Edge;
    assert_eq!(Phase::of(Edge::Fall, Edge::Rise), Phase::Low);
    assert_eq!(Phase::of(Edge::Rise, Edge::Fall), Phase::High);
    assert_eq!(Phase::of(Edge::Rise, Edge::Rise), Phase::Period);
    assert_eq!(Phase::of(Edge::Fall, Edge::Fall), Phase::Period);
}

/// A fmax arc is held as its shortest period: the MHz a data sheet gives, as ns.
fn period_of_mhz(mhz: f64) -> f64 {
    1000.0 / mhz
}

#[test]
fn added_buffers_registers_and_counters_match_their_tables() {
    let lib = Library::builtin();
    let max = |p: &str, a: &str, k: ArcKind, v: f64, t: f64| max_at(&lib, p, a, k, v, t);
    let d = ArcKind::Delay;
    // TI CD74HC244 SCHS167G, switching characteristics, HC types: data to outputs max
    // 100/20/17 (25 °C) | 125/25/21 (−40…85 °C) | 150/30/26 (−55…125 °C); output enable and
    // disable 150/30/26 | 190/38/33 | 225/45/38; HCT types at 4.5 V: 22 | 28 | 33 and 30 | 38 | 45
    assert_eq!(max("74HC244/ti-cd", "A->Y", d, 4.5, 25.0), 20.0);
    assert_eq!(max("74HC244/ti-cd", "A->Y", d, 6.0, -40.0), 21.0);
    assert_eq!(max("74HC244/ti-cd", "A->Y", d, 2.0, 125.0), 150.0);
    assert_eq!(max("74HC244/ti-cd", "OE->Z", d, 4.5, 85.0), 38.0);
    assert_eq!(max("74HC244/ti-cd", "OE->Y", d, 6.0, 125.0), 38.0);
    assert_eq!(max("74HCT244/ti-cd", "A->Y", d, 4.5, 125.0), 33.0);
    assert_eq!(max("74HCT244/ti-cd", "OE->Z", d, 5.0, 25.0), 30.0);
    // TI CD74HC541 SCHS189E, switching characteristics, HC types: data to outputs (541) max
    // 115/23 (2 / 4.5 V, 25 °C) | 145/29 | 175/35; above 4.5 V the 4.5 V column holds
    assert_eq!(max("74HC541/ti-cd", "A->Y", d, 2.0, 125.0), 175.0);
    assert_eq!(max("74HC541", "A->Y", d, 5.0, 85.0), 29.0);
    // STMicroelectronics M54/M74HC540/541, AC electrical characteristics, CL = 50 pF (columns
    // re-assembled from a mirror's text): tPLH/tPHL max 85/17/14 (2 / 4.5 / 6 V, 25 °C) |
    // 105/21/18 (−40…85 °C); output enable tPZL/tPZH 110/22/19 | 140/28/24; disable
    // tPLZ/tPHZ 110/22/19 | 140/28/24
    assert_eq!(max("74HC541/st", "A->Y", d, 6.0, 85.0), 18.0);
    assert_eq!(max("74HC541/st", "OE->Y", d, 4.5, 25.0), 22.0);
    assert_eq!(max("74HC541/st", "OE->Z", d, 2.0, 85.0), 140.0);
    // the generic part takes the enable rows from the one sheet that has them, and the worse
    // data row (TI's 23 ns at 4.5 V, 25 °C against ST's 17)
    assert_eq!(max("74HC541", "OE->Y", d, 4.5, 85.0), 28.0);
    assert_eq!(max("74HC541", "A->Y", d, 4.5, 25.0), 23.0);
    // TI CD74HC173 SCHS158F, switching characteristics, HC types: clock to output 200/40/34 |
    // 250/50/43 | 300/60/51; MR to output 175/35/30 | 220/44/37 | 265/53/45; prerequisites:
    // f_max 6/30/35 | 5/24/28 | 4/20/24 MHz, clock pulse width 80/16/14 | 100/20/17 | 120/24/20
    assert_eq!(max("74HC173/ti-cd", "CLK->Q", d, 4.5, 25.0), 40.0);
    assert_eq!(max("74HC173/ti-cd", "CLR->Q", d, 6.0, 125.0), 45.0);
    assert_eq!(
        max("74HC173/ti-cd", "CLK", ArcKind::PulseWidth, 2.0, 85.0),
        100.0
    );
    let f = max("74HC173/ti-cd", "CLK", ArcKind::Fmax, 4.5, 85.0);
    assert!((f - period_of_mhz(24.0)).abs() < 0.01, "{f}");
    // TI CD74HC4040 SCHS203E, HC types: CP to Q1 max 140/28/24 | 175/35/30 | 210/42/36;
    // prerequisites: f_max 6/30/35 | 5/25/29 | 4/20/24 MHz, input pulse width 80/16/14 |
    // 100/20/17 | 120/24/20, reset removal 50/10/9 | 65/13/11 | 75/15/13
    assert_eq!(max("74HC4040/ti-cd", "CLK->Q1", d, 4.5, 85.0), 35.0);
    assert_eq!(max("74HC4040/ti-cd", "CLK->Q1", d, 2.0, 25.0), 140.0);
    assert_eq!(
        max("74HC4040/ti-cd", "CLK", ArcKind::PulseWidth, 4.5, 125.0),
        24.0
    );
    assert_eq!(
        max("74HC4040/ti-cd", "CLR->CLK", ArcKind::Setup, 6.0, 25.0),
        9.0
    );
    let f = max("74HC4040/ti-cd", "CLK", ArcKind::Fmax, 6.0, 85.0);
    assert!((f - period_of_mhz(29.0)).abs() < 0.01, "{f}");
    // TI SN74HCT08 SCLS063G and SN74HCT32 SCLS064G, switching characteristics: A or B to Y max
    // 24 / 22 ns at 4.5 / 5.5 V (25 °C), 30 / 27 ns (SN74, −40…85 °C); typ 15 / 13 ns
    for p in ["74HCT08", "74HCT32"] {
        assert_eq!(max(p, "A->Y", d, 4.5, 25.0), 24.0);
        assert_eq!(max(p, "A->Y", d, 5.5, 85.0), 27.0);
        // between the columns the 4.5 V one holds
        assert_eq!(max(p, "A->Y", d, 5.0, 85.0), 30.0);
        let typ = value(&lib, p, "A->Y", d, Corner::Typ, 4.5, 25.0);
        assert_eq!(typ.ns, Some(15.0));
    }
    // TI SN74HC151, 4.5 V, 25 °C, as quoted by a VHDL timing-model library (secondary):
    // A, B, C to Y 50 ns, D to Y 39 ns, G to Y 25 ns
    assert_eq!(max("74HC151", "S->Y", d, 4.5, 25.0), 50.0);
    assert_eq!(max("74HC151", "I->Y", d, 4.5, 25.0), 39.0);
    assert_eq!(max("74HC151", "E->Y", d, 4.5, 25.0), 25.0);
}

#[test]
fn added_act74_rows_match_their_tables() {
    let lib = Library::builtin();
    let max = |p: &str, a: &str, k: ArcKind, v: f64, t: f64| max_at(&lib, p, a, k, v, t);
    // TI CD74ACT74 (JAJSV57A), switching characteristics at 5 V ± 0.5 V: f_max 97 MHz
    // (−40…85 °C) and 85 MHz (−55…125 °C); CLK to Q max 8.6 and 9.5 ns, min 2.5 and 2.4 ns
    assert_eq!(
        max("74ACT74/ti-cd", "CLK->Q", ArcKind::Delay, 5.0, 25.0),
        8.6
    );
    assert_eq!(
        max("74ACT74/ti-cd", "CLK->Q", ArcKind::Delay, 4.5, 100.0),
        9.5
    );
    let min = value(
        &lib,
        "74ACT74/ti-cd",
        "CLK->Q",
        ArcKind::Delay,
        Corner::Min,
        5.0,
        25.0,
    );
    // both columns cover 25 °C: the minimum taken is the smaller, 2.4 ns (never above a
    // published minimum that applies)
    assert_eq!(min.ns, Some(2.4));
    let f = max("74ACT74/ti-cd", "CLK", ArcKind::Fmax, 5.0, 85.0);
    assert!((f - period_of_mhz(97.0)).abs() < 0.01, "{f}");
    // TI SN74ACT74 SCAS520J, timing requirements: f_clock 145 MHz (25 °C), 125 MHz (SN74,
    // −40…85 °C); CLK pulse width 5 | 6 ns; setup data before CLK↑ 3 | 3.5 ns
    assert_eq!(
        max("74ACT74/ti-sn", "CLK", ArcKind::PulseWidth, 5.0, 85.0),
        6.0
    );
    assert_eq!(
        max("74ACT74/ti-sn", "D->CLK", ArcKind::Setup, 5.0, 25.0),
        3.0
    );
    // the generic 74ACT74 is the worst of the two: 97 MHz from TI's CD74ACT74 at 25 °C,
    // below the SN74ACT74's 145 MHz
    let f = max("74ACT74", "CLK", ArcKind::Fmax, 5.0, 25.0);
    assert!((f - period_of_mhz(97.0)).abs() < 0.01, "{f}");
}

#[test]
fn a_4040s_fmax_binds_before_its_pulse_width() {
    // TI CD74HC4040 SCHS203E at 4.5 V, 25 °C: input pulse width 16 ns (a 50 % clock of
    // 31.25 MHz) and f_max 30 MHz; CP to Q1 28 ns. TI SN74HC4040 SCLS160E, 5.6: f_max 28 MHz
    // at 4.5 V, 25 °C. The generic part holds the worse, 28 MHz, and the pulse width (from the
    // CD74 only) still allows more. The counter advances on the falling edge.
    let lib = Library::builtin();
    let d = design(
        &lib,
        r#"
[design]
name = "ripple counter alone"
[[part]]
ref = "U1"
type = "74HC4040"
[[launch]]
edge = "fall"
part = "U1"
arc = "CLK->Q1"
to = "q1"
[[capture]]
signal = "q1"
edge = "fall"
setup = "0 ns"
"#,
    );
    let b = solve(&d, &lib, &op(4.5, 25.0), None, None);
    assert_eq!(b.limits.period.binds, LimitKind::PartFmax);
    assert!((b.fmax_50_hz - 28e6).abs() < 1e-3, "{}", b.fmax_50_hz);
}

#[test]
fn added_act_gates_and_the_hct574_enable_match_their_tables() {
    let lib = Library::builtin();
    let max = |p: &str, a: &str, k: ArcKind, v: f64, t: f64| max_at(&lib, p, a, k, v, t);
    let min = |p: &str, a: &str, v: f64, t: f64| {
        value(&lib, p, a, ArcKind::Delay, Corner::Min, v, t)
            .ns
            .unwrap()
    };
    let d = ArcKind::Delay;
    // TI CD74ACT04 SCHS310C, CD74ACT08 SCHS312C, CD74ACT32 SCHS342A, switching characteristics
    // at 5 V ± 0.5 V, CL = 50 pF: max (min) −40…85 °C | −55…125 °C
    for (p, m85, m125, n125) in [
        ("74ACT04", 8.5, 9.3, 2.3),
        ("74ACT08", 11.7, 12.9, 3.2),
        ("74ACT32", 11.0, 12.1, 3.0),
    ] {
        assert_eq!(max(p, "A->Y", d, 5.0, 85.0), m85, "{p}");
        assert_eq!(max(p, "A->Y", d, 4.5, 125.0), m125, "{p}");
        // the minimum holds up to 5.5 V, and the wider column covers the colder end
        assert_eq!(min(p, "A->Y", 5.5, -55.0), n125, "{p}");
    }
    // TI CD74ACT00 SCHS308C: tPLH 9.5 | 10.8, tPHL 8 | 13.2: the larger of the two per column
    assert_eq!(max("74ACT00", "A->Y", d, 5.0, 25.0), 9.5);
    assert_eq!(max("74ACT00", "A->Y", d, 5.0, 125.0), 13.2);
    // TI CD74ACT138 SCHS329B: A, B, C to Y 10.9 | 12; G1 10 | 11, G2A/G2B 9.5 | 10.5
    assert_eq!(max("74ACT138", "A->Y", d, 5.0, 85.0), 10.9);
    assert_eq!(max("74ACT138", "E->Y", d, 5.0, 125.0), 11.0);
    // TI CD74ACT174 SCHS344B / JAJSUE2A: CLK to Q 12.6 | 14; f_max 91 | 80 MHz; CLK pulse
    // width 5.4 | 6.2; hold 2.2 | 2.5; setup 2 ns
    assert_eq!(max("74ACT174", "CLK->Q", d, 5.0, 25.0), 12.6);
    assert_eq!(max("74ACT174", "CLK", ArcKind::PulseWidth, 5.0, 100.0), 6.2);
    assert_eq!(max("74ACT174", "D->CLK", ArcKind::Hold, 5.0, 25.0), 2.2);
    let f = max("74ACT174", "CLK", ArcKind::Fmax, 5.0, 85.0);
    assert!((f - period_of_mhz(91.0)).abs() < 0.01, "{f}");
    // TI CD74ACT74 SCHS321A: PRE or CLR to Q 10.5 | 11.5; timing requirements (JAJSV57A): CLK
    // pulse width 5 | 5.7, setup data 3.5 | 4
    assert_eq!(max("74ACT74/ti-cd", "CLR->Q", d, 5.0, 125.0), 11.5);
    assert_eq!(
        max("74ACT74/ti-cd", "CLK", ArcKind::PulseWidth, 5.0, 125.0),
        5.7
    );
    assert_eq!(
        max("74ACT74/ti-cd", "D->CLK", ArcKind::Setup, 5.0, 25.0),
        3.5
    );
    // the generic takes the SN74ACT74's 6 ns (−40…85 °C) over the CD74ACT74's 5 ns
    assert_eq!(max("74ACT74", "CLK", ArcKind::PulseWidth, 5.0, 85.0), 6.0);
    // TI SN74HCT574 SCLS177H, CL = 50 pF: ten OE to Q max 30 / 27 ns (4.5 / 5.5 V, 25 °C),
    // 38 / 34 ns (SN74); f_max min 30 / 33 MHz, 24 / 27 MHz (SN74)
    assert_eq!(max("74HCT574/ti-sn", "OE->Q", d, 5.5, 85.0), 34.0);
    let f = max("74HCT574/ti-sn", "CLK", ArcKind::Fmax, 4.5, 85.0);
    assert!((f - period_of_mhz(24.0)).abs() < 0.01, "{f}");
}

#[test]
fn the_373s_transparent_row_matches_its_table() {
    // TI CD74HC373 SCLS452C, switching characteristics: D to Q max 150/30/26 (25 °C),
    // 190/38/33 (−40…85 °C), 225/45/38 (−55…125 °C)
    let lib = Library::builtin();
    for (v, t, want) in [(2.0, 25.0, 150.0), (4.5, 85.0, 38.0), (6.0, 125.0, 38.0)] {
        assert_eq!(max_at(&lib, "74HC373", "D->Q", ArcKind::Delay, v, t), want);
    }
}

#[test]
fn the_164_and_4040_rows_match_their_tables() {
    let lib = Library::builtin();
    let max = |p: &str, a: &str, k: ArcKind, v: f64, t: f64| max_at(&lib, p, a, k, v, t);
    // TI CD74HC164, Japanese edition JAJSOB3E (May 2024) of the SCHS155 data sheet, tables in
    // English. 5.6 switching characteristics, HC types: CLR to Q max 140/28/24 (25 °C) |
    // 175/35/30 (−40…85 °C) | 210/42/36 (−55…125 °C).
    assert_eq!(
        max("74HC164/ti-cd", "CLR->Q", ArcKind::Delay, 2.0, 25.0),
        140.0
    );
    assert_eq!(
        max("74HC164/ti-cd", "CLR->Q", ArcKind::Delay, 6.0, 125.0),
        36.0
    );
    // 5.5 prerequisite for switching, HC types: set-up 60/12/10 | 75/15/13 | 90/18/15, hold 4
    // at every supply and temperature, clock pulse width 80/16/14 | 100/20/17 | 120/24/20,
    // removal (CLR to clock) the same, f_max 6/30/35 | 5/24/28 | 4/20/24 MHz.
    assert_eq!(
        max("74HC164/ti-cd", "D->CLK", ArcKind::Setup, 4.5, 85.0),
        15.0
    );
    assert_eq!(
        max("74HC164/ti-cd", "D->CLK", ArcKind::Setup, 2.0, 125.0),
        90.0
    );
    assert_eq!(
        max("74HC164/ti-cd", "D->CLK", ArcKind::Hold, 6.0, 125.0),
        4.0
    );
    assert_eq!(
        max("74HC164/ti-cd", "CLK", ArcKind::PulseWidth, 6.0, 85.0),
        17.0
    );
    assert_eq!(
        max("74HC164/ti-cd", "CLR->CLK", ArcKind::Setup, 4.5, 25.0),
        16.0
    );
    let f = max("74HC164/ti-cd", "CLK", ArcKind::Fmax, 4.5, 125.0);
    assert!((f - period_of_mhz(20.0)).abs() < 0.01, "{f}");
    // Same document, HCT types at 4.5 V: CLK to Q 36 | 45 | 54, CLR to Q 38 | 46 | 57,
    // f_max 27 | 22 | 18 MHz, clock pulse width 18 | 23 | 27, hold 4. Between 4.5 and 5.5 V
    // the 4.5 V column holds.
    assert_eq!(
        max("74HCT164/ti-cd", "CLK->Q", ArcKind::Delay, 4.5, 85.0),
        45.0
    );
    assert_eq!(max("74HCT164", "CLK->Q", ArcKind::Delay, 5.0, 125.0), 54.0);
    assert_eq!(max("74HCT164", "CLR->Q", ArcKind::Delay, 4.5, 125.0), 57.0);
    assert_eq!(max("74HCT164", "CLK", ArcKind::PulseWidth, 4.5, 25.0), 18.0);
    assert_eq!(max("74HCT164", "D->CLK", ArcKind::Hold, 4.5, 85.0), 4.0);
    let f = max("74HCT164", "CLK", ArcKind::Fmax, 4.5, 85.0);
    assert!((f - period_of_mhz(22.0)).abs() < 0.01, "{f}");
    // TI SN74HC4040 SCLS160E, 5.6 switching characteristics (CL = 50 pF): CLK to QA max
    // 150/30/26 (25 °C) | 190/38/32 (SN74, −40…85 °C), typ 62/16/12; CLR to any Q max
    // 140/28/24 | 175/35/30; f_max min 5.5/28/33 | 4.3/22/25 MHz.
    assert_eq!(
        max("74HC4040/ti-sn", "CLK->Q1", ArcKind::Delay, 4.5, 25.0),
        30.0
    );
    assert_eq!(
        max("74HC4040/ti-sn", "CLK->Q1", ArcKind::Delay, 6.0, 85.0),
        32.0
    );
    assert_eq!(
        max("74HC4040/ti-sn", "CLR->Q", ArcKind::Delay, 2.0, 85.0),
        175.0
    );
    let typ = value(
        &lib,
        "74HC4040/ti-sn",
        "CLK->Q1",
        ArcKind::Delay,
        Corner::Typ,
        4.5,
        25.0,
    );
    assert_eq!(typ.ns, Some(16.0));
    let f = max("74HC4040/ti-sn", "CLK", ArcKind::Fmax, 6.0, 85.0);
    assert!((f - period_of_mhz(25.0)).abs() < 0.01, "{f}");
    // the generic 74HC4040 is the worse of the CD74 (CP to Q1 28 ns at 4.5 V, 25 °C) and
    // the SN74 (30 ns)
    assert_eq!(max("74HC4040", "CLK->Q1", ArcKind::Delay, 4.5, 25.0), 30.0);
    // the set-up row of the HCT table names a 6 V supply, so it was left out: none is held
    let p = lib.part_index("74HCT164/ti-cd").unwrap();
    assert!(lib.parts[p].arc("D->CLK", ArcKind::Setup).is_none());
}

#[test]
fn the_ac74_timing_requirements_match_their_table() {
    let lib = Library::builtin();
    let max = |a: &str, k: ArcKind, v: f64, t: f64| max_at(&lib, "74AC74/ti-cd", a, k, v, t);
    // TI CD74AC74 SCHS231E (Japanese edition JAJSV60E), 4.8 timing requirements at
    // 5 V ± 0.5 V, −55…125 °C | −40…85 °C: fclock 110 | 125 MHz, tw CLK 4.5 | 3.9 ns,
    // tsu data 3.5 | 3.1 ns, th 0 | 0 ns, trec 2.7 | 2.4 ns. The column holds from 4.5 V up.
    assert_eq!(max("CLK", ArcKind::PulseWidth, 5.0, 85.0), 3.9);
    assert_eq!(max("CLK", ArcKind::PulseWidth, 5.5, 125.0), 4.5);
    assert_eq!(max("D->CLK", ArcKind::Setup, 4.5, 25.0), 3.1);
    assert_eq!(max("D->CLK", ArcKind::Setup, 5.0, 125.0), 3.5);
    assert_eq!(max("D->CLK", ArcKind::Hold, 5.0, 85.0), 0.0);
    assert_eq!(max("CLR->CLK", ArcKind::Setup, 5.0, -40.0), 2.4);
    let f = max("CLK", ArcKind::Fmax, 5.0, 125.0);
    assert!((f - period_of_mhz(110.0)).abs() < 0.01, "{f}");
    // no delay row was read, so none is held
    let p = lib.part_index("74AC74/ti-cd").unwrap();
    assert!(lib.parts[p].arc("CLK->Q", ArcKind::Delay).is_none());
}

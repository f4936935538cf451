//! The budget engine checked against published values: data-sheet columns, the published
//! counter cascade rule, and the worked example of the clock plan.
//! Sources are named beside each check; docs/REFERENCES.md lists each value with its source.

use slackmeter::budget::derate::{self, Conditions, Corner};
use slackmeter::budget::library::{ArcKind, BUILTIN_FILES, Library};
use slackmeter::budget::solver::{HoldStatus, Phase};
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

fn max_at(lib: &Library, part: &str, arc: &str, kind: ArcKind, vcc_v: f64, temp_c: f64) -> f64 {
    let p = lib.part_index(part).unwrap();
    let a = lib.parts[p].arc(arc, kind).unwrap();
    let c = Conditions {
        vcc_v,
        temp_c,
        load_pf: None,
    };
    derate::eval(lib, p, a, Corner::Max, &c).ns.unwrap()
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
status = \"seen\"\nload_pf = 50\nvcc_v = {vcc}\n[[part.arc]]\nname = \"{arc}\"\nkind = \"delay\"\nmax_ns = {max}\n"
    )
}

/// Fit without one supply column, predict it, compare with the data sheet.
/// The held-out part replaces the built-in one, so the family fit never sees the column.
fn holdout(ty: &str, arc: &str, vcc: &str, max: &str, at_v: f64, want: [f64; 3]) -> Vec<f64> {
    let lib = lib_with(&one_arc_part(ty, arc, vcc, max));
    [25.0, 85.0, 125.0]
        .into_iter()
        .zip(want)
        .map(|(t, w)| {
            let got = max_at(&lib, ty, arc, ArcKind::Delay, at_v, t);
            let err = 100.0 * (got / w - 1.0);
            println!("{ty} {arc} at {at_v} V, {t} °C: predicted {got:.2} ns, data sheet {w} ns ({err:+.1} %)");
            err
        })
        .collect()
}

#[test]
fn derating_predicts_held_out_4v5_columns_within_7_percent() {
    // Found when this test was written: +2.8 … +6.1 % over these nine values. Bound: 7 %.
    let mut errs = Vec::new();
    // NXP 74HC04-Q100/74HCT04-Q100 data sheet Rev. 2 (2013), A→Y max: 85/17/14, 105/21/18, 130/26/22
    errs.extend(holdout(
        "74HC04",
        "A->Y",
        "[2.0, 6.0]",
        "{ 25 = [85, 14], 85 = [105, 18], 125 = [130, 22] }",
        4.5,
        [17.0, 21.0, 26.0],
    ));
    // Philips 74HC/HCT30 (Dec 1990), max: 130/26/22, 165/33/28, 195/39/33
    errs.extend(holdout(
        "74HC30",
        "A->Y",
        "[2.0, 6.0]",
        "{ 25 = [130, 22], 85 = [165, 28], 125 = [195, 33] }",
        4.5,
        [26.0, 33.0, 39.0],
    ));
    // TI CD74HC574 SCHS183E, CLK→Q max: 165/33/28, 205/41/35, 250/50/43
    errs.extend(holdout(
        "74HC574",
        "CLK->Q",
        "[2.0, 6.0]",
        "{ 25 = [165, 28], 85 = [205, 35], 125 = [250, 43] }",
        4.5,
        [33.0, 41.0, 50.0],
    ));
    for e in &errs {
        assert!(e.abs() < 7.0, "held-out error {e:.1} % ≥ 7 %");
    }
}

#[test]
fn derating_extrapolates_held_out_6v_column_within_10_percent() {
    // Predict 6.0 V from the 2.0 and 4.5 V columns: extrapolation, so a wider bound.
    let mut errs = Vec::new();
    // NXP 74HC04-Q100 Rev. 2 (2013)
    errs.extend(holdout(
        "74HC04",
        "A->Y",
        "[2.0, 4.5]",
        "{ 25 = [85, 17], 85 = [105, 21], 125 = [130, 26] }",
        6.0,
        [14.0, 18.0, 22.0],
    ));
    // TI CD74HC164 SCHS155E, CLK→Q max: 170/34/29, 212/43/36, 255/51/43
    errs.extend(holdout(
        "74HC164",
        "CLK->Q",
        "[2.0, 4.5]",
        "{ 25 = [170, 34], 85 = [212, 43], 125 = [255, 51] }",
        6.0,
        [29.0, 36.0, 43.0],
    ));
    for e in &errs {
        assert!(e.abs() < 10.0, "extrapolation error {e:.1} % ≥ 10 %");
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
        s.alpha > 1.0 && s.vt_v < 2.0,
        "physical: α > 1, Vt below the lowest column"
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
            let got = max_at(&lib, "74HC30", "A->Y", ArcKind::Delay, v, t);
            assert!(
                (got - hc30[ti][vi]).abs() < 1e-9,
                "74HC30 {v} V {t} °C: {got}"
            );
            let got = max_at(&lib, "74HC574", "D->CLK", ArcKind::Setup, v, t);
            assert!(
                (got - hc574_su[ti][vi]).abs() < 1e-9,
                "setup {v} V {t} °C: {got}"
            );
        }
        for (vi, v) in [2.0, 3.0, 4.5, 6.0].into_iter().enumerate() {
            let got = max_at(&lib, "74HC161", "CLK->Q", ArcKind::Delay, v, t);
            assert!(
                (got - hc161[ti][vi]).abs() < 1e-9,
                "74HC161 {v} V {t} °C: {got}"
            );
        }
    }
    // between columns the value lies between its neighbours
    let mid = max_at(&lib, "74HC30", "A->Y", ArcKind::Delay, 4.5, 55.0);
    assert!(mid > 26.0 && mid < 33.0, "{mid}");
}

const CHAIN: &str = r#"
[design]
name = "register to register through two inverters"
[[part]]
ref = "U1"
type = "74HC574"
[[part]]
ref = "U2"
type = "74HC04"
[[part]]
ref = "U3"
type = "74HC574"
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
    // TI CD74HC574 SCHS183E (CLK→Q 33/41/50 at 4.5 V; 28/35/43 at 6 V; setup 12/15/18; 10/13/15)
    // NXP 74HC04-Q100 Rev. 2 (2013) (A→Y 17/21/26 at 4.5 V; 14/18/22 at 6 V)
    let cases = [
        (4.5, 25.0, 33.0 + 17.0 + 17.0 + 12.0),
        (4.5, 85.0, 41.0 + 21.0 + 21.0 + 15.0),
        (4.5, 125.0, 50.0 + 26.0 + 26.0 + 18.0),
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
        assert_eq!(b.low_required_ns, 0.0);
        assert!((b.fmax_50_hz - 1e9 / want).abs() < 1e-3);
        let path = b.critical_paths.period.as_ref().unwrap();
        assert_eq!(path.steps.len(), 5, "clock, CLK->Q, 2 inverters, setup");
        let b = solve(&opposite, &lib, &op(v, t), None, None);
        // launched on ↑, captured on ↓: the high phase must hold it; f_max at 50 % is 1/(2H)
        assert!((b.high_required_ns - want).abs() < 1e-9);
        assert!((b.fmax_50_hz - 1e9 / (2.0 * want)).abs() < 1e-3);
        assert!(
            (b.best_duty - 1.0).abs() < 1e-12,
            "only H constrains: d* = H/(0+H) = 1"
        );
    }
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
fn hold_checks_are_unknown_without_minimum_delays() {
    let lib = Library::builtin();
    let d = design(&lib, &CHAIN.replace("EDGE", "rise"));
    let b = solve(&d, &lib, &op(5.0, 25.0), None, None);
    assert_eq!(b.holds.len(), 1);
    // no data sheet minimum for CLK→Q or A→Y: never reported as passed
    assert_eq!(b.holds[0].status, HoldStatus::UnknownMin);
    // with known minima (fixed delays) the check decides: 3 ns early arrival vs 5 ns hold
    // (TI CD74HC574 SCHS183E hold 5 ns)
    let d = design(
        &lib,
        r#"
[design]
name = "hold"
[[part]]
ref = "U1"
type = "74HC574"
[[part]]
ref = "U3"
type = "74HC574"
[[launch]]
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q"
[[arc]]
from = "q"
to = "d"
delay = { min = "3 ns", max = "4 ns" }
[[capture]]
signal = "d"
edge = "rise"
part = "U3"
check = "D->CLK"
[[override]]
part = "U1"
arc = "CLK->Q"
min = "0 ns"
max = "33 ns"
"#,
    );
    let b = solve(&d, &lib, &op(4.5, 25.0), None, None);
    assert_eq!(b.holds[0].status, HoldStatus::Fail);
    assert!((b.holds[0].slack_ns - (3.0 - 5.0)).abs() < 1e-9);
}

#[test]
fn lower_supply_needs_longer_phases_and_flags_out_of_spec() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    let hi = solve(&d, &lib, &op(5.0, 25.0), None, None);
    let lo = solve(&d, &lib, &op(4.6, 25.0), None, None);
    assert!(lo.low_required_ns > hi.low_required_ns);
    assert!(lo.fmax_50_hz < hi.fmax_50_hz);
    assert!(hi.in_spec && lo.in_spec);
    // the EEPROMs and SRAM are specified for 4.5–5.5 V only
    let out = solve(&d, &lib, &op(4.2, 25.0), None, None);
    assert!(!out.in_spec);
    assert!(
        out.warnings
            .iter()
            .any(|w| w.contains("OUT OF SPEC") && w.contains("AT28C256-20")),
        "{:?}",
        out.warnings
    );
    // a sagging far section alone costs low-phase time (the ALU sits there)
    let mut sag = op(5.0, 25.0);
    sag.section_vcc_v.insert("far".into(), 4.6);
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
}

#[test]
fn phases_are_classified_by_edges() {
    use slackmeter::budget::design::Edge;
    assert_eq!(Phase::of(Edge::Fall, Edge::Rise), Phase::Low);
    assert_eq!(Phase::of(Edge::Rise, Edge::Fall), Phase::High);
    assert_eq!(Phase::of(Edge::Rise, Edge::Rise), Phase::Period);
    assert_eq!(Phase::of(Edge::Fall, Edge::Fall), Phase::Period);
}

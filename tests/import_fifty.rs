//! Foxglove-8, the second invented example machine (docs/DEMO-MACHINE.md): its netlist
//! (`designs/foxglove-8.net`, written by `tests/fifty/netlist.rs`) imported and budgeted. The
//! import is checked as a regression against the checked-in design; two of its paths are summed
//! by hand from the library's data-sheet values at 4.5 V and 25 °C (a column of every part on
//! them, so nothing is interpolated) and compared with the solver.

#[path = "fifty/netlist.rs"]
mod netlist;

use std::collections::BTreeMap;

use std::process::Command;

use slackmeter::budget::derate::Corner;
use slackmeter::budget::solver::Phase;
use slackmeter::budget::{Design, Library, OperatingPoint, solve};
use slackmeter::diag::Source;
use slackmeter::import::{self, Options};

const NETLIST: &str = "designs/foxglove-8.net";
const DESIGN: &str = "designs/foxglove-8.toml";

fn root(p: &str) -> std::path::PathBuf {
    std::path::Path::new(env!("CARGO_MANIFEST_DIR")).join(p)
}

fn imported(text: &str) -> import::Import {
    let src = Source::new(NETLIST, text);
    let net = import::parse(&src).unwrap_or_else(|e| panic!("{e:?}"));
    let map = BTreeMap::new();
    import::import(
        &net,
        &Library::builtin(),
        &Options {
            clock: "CLK",
            map: &map,
            name: "foxglove-8",
            source: NETLIST,
            sections: &[],
        },
    )
    .unwrap()
}

#[test]
fn the_checked_in_netlist_is_the_generators() {
    let text = netlist::foxglove();
    if std::env::var_os("SLACKMETER_BLESS").is_some() {
        std::fs::write(root(NETLIST), &text).unwrap();
        std::fs::write(root(DESIGN), imported(&text).design).unwrap();
    }
    let on_disk = std::fs::read_to_string(root(NETLIST)).unwrap();
    assert!(
        on_disk == text,
        "designs/foxglove-8.net differs from tests/fifty/netlist.rs: regenerate with SLACKMETER_BLESS=1"
    );
}

#[test]
fn importing_the_netlist_gives_the_checked_in_design() {
    // Regression test: the checked-in design is this import's own output (written by
    // `slackmeter import designs/foxglove-8.net --clock CLK -o designs/foxglove-8.toml`); what
    // is checked is that it has not changed, that nothing was left undecided, and that the
    // command writes the same text.
    let text = std::fs::read_to_string(root(NETLIST)).unwrap();
    let want = std::fs::read_to_string(root(DESIGN)).unwrap();
    let done = imported(&text);
    assert!(done.todos.is_empty(), "{:#?}", done.todos);
    assert!(
        done.design == want,
        "the import of {NETLIST} is not {DESIGN}"
    );
    // 50 chips matched; a decoupling capacitor beside each and four connectors left out
    assert_eq!(done.skipped.len(), 50 + 4, "{:?}", done.skipped);
    assert!(text.contains("INVENTED DEMO DATA"));
    let o = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["import", NETLIST, "--clock", "CLK"])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    assert!(String::from_utf8_lossy(&o.stdout) == want);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(!err.contains("TODO"), "{err}");
}

fn design() -> (Design, Library) {
    let lib = Library::builtin();
    let text = std::fs::read_to_string(root(DESIGN)).unwrap();
    let d = Design::parse(Source::new(DESIGN, text), &lib).unwrap_or_else(|e| panic!("{e:?}"));
    (d, lib)
}

#[test]
fn two_paths_summed_by_hand_from_the_data_sheets_match_the_budget() {
    let (d, lib) = design();
    assert_eq!(d.instances.len(), 50);
    // 4.5 V, 25 °C: a data-sheet column of every part on both paths. Each delay is the library's
    // value there; a generic type ("74HC161") is the worst of the library's vendor variants.
    let op = OperatingPoint {
        vcc_v: 4.5,
        section_vcc_v: Default::default(),
        temp_c: 25.0,
        corner: Corner::Max,
    };
    let b = solve(&d, &lib, &op, None, None);

    // Path 1, the program counter's carry ripple (full period, CLK↑ to CLK↑): U601 CLK->TC →
    // TC0 → U602 CET->TC → TC1 → U603 CET->TC → TC2 → U604 CET setup.
    //  74HC161 CLK->TC, 4.5 V, 25 °C: 74HC161/ti-sn 43 ns ("TI SN74HC161 data sheet, timing
    //    requirements and switching characteristics at 4.5 V, 25 °C, as quoted by a VHDL
    //    timing-model library", secondary); 74HC161/nxp 37 ns ("NXP 74HC161 data sheet", from
    //    memory) → worst 43 ns
    //  74HC161 CET->TC: 74HC161/onsemi 18 ns ("onsemi MC74HC161A/D, AC electrical
    //    characteristics", "-55..25" column), ti-sn 39 ns, nxp 27 ns (from memory) → 39 ns
    //  74HC161 CET->CLK setup: ti-sn 34 ns (the only variant with it)
    //  The other arrivals at TC2 are shorter: U603's own CLK->TC 43 ns, U602's 43 + 39 = 82 ns.
    let arrival = 43.0 + 39.0 + 39.0;
    let required = arrival + 34.0; // 155 ns
    let e = b
        .endpoints
        .iter()
        .find(|e| e.capture == "address/TC2 at U604" && e.phase == Phase::Period)
        .unwrap_or_else(|| panic!("{:#?}", b.endpoints));
    assert_eq!(
        (e.arrival_ns, e.setup_ns, e.required_ns),
        (arrival, 34.0, required)
    );
    // one stage of the ripple alone: U601 CLK->TC 43 ns + U602 CET setup 34 ns
    let e = b
        .endpoints
        .iter()
        .find(|e| e.capture == "address/TC0 at U602")
        .unwrap();
    assert_eq!(e.required_ns, 43.0 + 34.0);

    // Path 2, the slowest of the low phase (CLK↓ to CLK↑): the step counter, clocked through an
    // inverter, moves the microcode address; the new word switches the address bus from the PC
    // to the MAR; the program ROM's data crosses to the bus and the front panel's latch.
    //  U101 74HC04 A->Y: 74HC04/nxp 17 ns ("NXP 74HC04-Q100/74HCT04-Q100 data sheet Rev. 2
    //    (2013), dynamic characteristics"), 74HC04/ti-sn 19 ns ("TI High-Speed CMOS Logic Data
    //    Book (1989), SN74HC04, as quoted by a simulator library: max tpd at 4.5 V, 25 °C
    //    only", secondary) → 19 ns
    //  U204 74HC161 CLK->Q: onsemi 22 ns, ti-sn 41 ns → 41 ns
    //  U207 AT28C256-20 ADDR->D: 200 ns ("Microchip AT28C256 data sheet
    //    0006M–PEEPR–12/09 … AC read characteristics"; one value for 4.5–5.5 V over the whole
    //    −55…125 °C range, stored as the 125 °C column, so it is the sheet's value at 25 °C)
    //  U203 74HC04 A->Y: 19 ns (as above)
    //  U612 74HC245 OE->B (enable time): 30 ns ("Philips 74HC245; 74HCT245 product data sheet
    //    Rev. 03 (2005), Table 9", 25 °C, 4.5 V; the only variant)
    //  U502 AT28C256-15/ind ADDR->D: 150 ns (the same sheet, −15 grade, one value over −40…85 °C)
    //  U503 74HC245 A->B: 18 ns (Philips 74HC245 Rev. 03, Table 9)
    //  U701 74HC574 D->CLK setup: 74HC574/ti-cd 12 ns ("TI CD74HC574 data sheet SCHS183E
    //    (CD74HC374/574), switching specifications and prerequisites for switching"),
    //    74HC574/ti-sn 20 ns ("TI SN74HC574 data sheet, timing requirements and switching
    //    characteristics at 4.5 V, 25 °C, as quoted by a VHDL timing-model library") → 20 ns
    let steps = [
        ("U101 74HC04 A->Y", 19.0),
        ("U204 74HC161 CLK->Q", 41.0),
        ("U207 AT28C256-20 ADDR->D", 200.0),
        ("U203 74HC04 A->Y", 19.0),
        ("U612 74HC245 OE->B", 30.0),
        ("U502 AT28C256-15/ind ADDR->D", 150.0),
        ("U503 74HC245 A->B", 18.0),
        ("setup U701 74HC574 D->CLK", 20.0),
    ];
    let low = 19.0 + 41.0 + 200.0 + 19.0 + 30.0 + 150.0 + 18.0 + 20.0; // 497 ns
    assert_eq!(b.low_required_ns, low);
    let path = b.critical_paths.low.as_ref().unwrap();
    assert_eq!(path.required_ns, low);
    let got: Vec<(&str, f64)> = path
        .steps
        .iter()
        .skip(1) // the clock edge, CLK↓
        .map(|s| (s.through.as_str(), s.delay_ns))
        .collect();
    assert_eq!(got, steps);
    assert_eq!(path.steps[0].through, "CLK↓");

    // at the design's own operating point (5 V: between the 4.5 and 6.0 V columns, the
    // guaranteed value is the 4.5 V column) the budget is the same
    let own = solve(&d, &lib, &OperatingPoint::of(&d), None, None);
    assert_eq!(own.vcc_v, 5.0);
    assert_eq!(own.low_required_ns, low);
}

fn run_import(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["import", NETLIST, "--clock", "CLK"])
        .args(args)
        .output()
        .unwrap()
}

#[test]
fn section_rules_put_sheets_and_references_into_sections() {
    // the seven sheets on three supply sections; the panel's latches moved by a reference
    // prefix, one of them by its reference
    let o = run_import(&[
        "--section",
        "/clock/=near",
        "--section",
        "/control=near",
        "--section",
        "/address/=mid",
        "--section",
        "/memory/=mid",
        "--section",
        "/=far",
        "--section",
        "U703=mid",
        "--section",
        "U70*=near",
    ]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let text = String::from_utf8(o.stdout).unwrap();
    assert!(
        text.contains("section = [{ name = \"far\" }, { name = \"mid\" }, { name = \"near\" }]\n"),
        "{text}"
    );
    assert!(text.contains(
        "# Sections from --section /clock/=near --section /control=near --section /address/=mid"
    ));
    let lib = Library::builtin();
    let d = Design::parse(Source::new("sections.toml", text.clone()), &lib)
        .unwrap_or_else(|e| panic!("{e:?}"));
    let section_of = |r: &str| {
        let i = d.instances.iter().find(|i| i.reference == r).unwrap();
        i.section.map(|s| d.sections[s].name.clone())
    };
    for (r, want) in [
        ("U101", "near"), // /clock/
        ("U205", "near"), // /control (the trailing "/" is optional)
        ("U601", "mid"),  // /address/
        ("U501", "mid"),  // /memory/
        ("U301", "far"),  // /regs/, through "/"
        ("U404", "far"),  // /alu/, through "/"
        ("U701", "near"), // the prefix U70* beats the sheet rule "/"
        ("U702", "near"),
        ("U703", "mid"), // its reference beats the prefix
    ] {
        assert_eq!(section_of(r).as_deref(), Some(want), "{r}");
    }
    // at one supply for all sections the budget is the one without rules
    let (plain, _) = design();
    let op = OperatingPoint::of(&d);
    let a = solve(&d, &lib, &op, None, None);
    let b = solve(&plain, &lib, &op, None, None);
    assert_eq!(
        (a.low_required_ns, a.high_required_ns, a.period_required_ns),
        (b.low_required_ns, b.high_required_ns, b.period_required_ns)
    );
}

#[test]
fn a_bad_or_unmatched_section_rule_is_a_clear_error() {
    for (rule, says) in [
        ("/alu/", "expected PATTERN=NAME"),
        ("=far", "the pattern before \"=\" is empty"),
        (
            "/alu/=far side",
            "the section name \"far side\" must be letters",
        ),
        ("U*1=far", "\"*\" may only end a reference prefix"),
        (
            "/aul/=far",
            "--section /aul/=far: no component of designs/foxglove-8.net matches it",
        ),
        (
            "U999=far",
            "no component of designs/foxglove-8.net matches it",
        ),
    ] {
        let o = run_import(&["--section", rule]);
        assert_eq!(o.status.code(), Some(2), "{rule}");
        let err = String::from_utf8_lossy(&o.stderr);
        assert!(err.contains(says), "{rule}: {err}");
        assert!(o.stdout.is_empty(), "{rule}: nothing is written");
    }
    let o = run_import(&["--section", "/aul/=far"]);
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("/alu/, /clock/, /control/"), "{err}");
    let o = run_import(&["--section", "/alu/=far", "--section", "/alu=near"]);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("its pattern was given before"));
}

#[test]
fn the_docs_figures_of_the_example_hold() {
    // Regression test of the figures docs/IMPORT.md and docs/DEMO-MACHINE.md give (the low
    // phase is the hand-computed path above; the others are the solver's own output)
    let (d, lib) = design();
    let b = solve(&d, &lib, &OperatingPoint::of(&d), None, None);
    assert_eq!(
        (b.low_required_ns, b.high_required_ns, b.period_required_ns),
        (497.0, 267.0, 477.0)
    );
    // at 50 % duty the low phase binds: T = 2 × 497 ns
    assert!((b.fmax_50_hz - 1e9 / 994.0).abs() < 1e-6);
    assert_eq!(format!("{:.3}", b.fmax_50_hz / 1e6), "1.006");
    assert_eq!(d.sections.len(), 7);
    let o = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
        .current_dir(env!("CARGO_MANIFEST_DIR"))
        .args(["check", DESIGN, "--json"])
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(0));
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(
        (j["errors"].as_u64(), j["warnings"].as_u64()),
        (Some(0), Some(75))
    );
    // every warning is an output nothing reads: the connectors' signals, the 62256's CE and WE
    let unused: Vec<&str> = j["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["check"].as_str().unwrap())
        .collect();
    assert!(unused.iter().all(|c| *c == "unused-output"), "{unused:?}");
    let messages: Vec<&str> = j["findings"]
        .as_array()
        .unwrap()
        .iter()
        .map(|f| f["message"].as_str().unwrap())
        .collect();
    for s in [
        "memory/RAM_n",
        "RI_n",
        "HLT",
        "panel/LA15",
        "panel/LR23",
        "regs/OUTB7",
    ] {
        let quoted = format!("signal \"{s}\" ");
        assert!(
            messages.iter().any(|m| m.contains(&quoted)),
            "{s}: {messages:?}"
        );
    }
}

//! The compact design syntax: the demo machine written compactly gives the same budget, to the
//! last digit, as the same machine in long tables (tests/fixtures/larkspur-8-long.toml, the
//! demo file as it was before the compact syntax); each compact form expands to the long tables
//! it stands for; includes prefix their names and their errors point into the included file.
//!
//! The outside reference of these tests is the long form itself: its budget is checked against
//! data-sheet values and hand arithmetic in tests/budget_reference.rs.

use std::collections::BTreeMap;
use std::process::Command;

use slackmeter::budget::design::{DEMO_DESIGN, InMemory, NoIncludes};
use slackmeter::budget::{Corner, Design, Library, OperatingPoint, solve, sweep_vcc};
use slackmeter::diag::Source;
use slackmeter::power::{self, PowerPoint, SupplyData, Wiring};

const LONG: &str = include_str!("fixtures/larkspur-8-long.toml");

fn parse(name: &str, text: &str, lib: &Library) -> Design {
    Design::parse(Source::new(name, text), lib).unwrap_or_else(|e| panic!("{name}: {e:?}"))
}

/// What the resolved design is, in words: instances, launches, arcs and captures in order.
fn outline(d: &Design, lib: &Library) -> Vec<String> {
    let mut out = Vec::new();
    for i in &d.instances {
        let section = i.section.map_or("-", |s| d.sections[s].name.as_str());
        out.push(format!(
            "part {} {} {section} {:?}",
            i.reference, lib.parts[i.part].type_name, i.load_pf
        ));
    }
    // launches and arcs are sets: their order changes no result (the budgets below check it);
    // captures are listed in file order and stay in it
    let mut launches = Vec::new();
    for l in &d.launches {
        let via: Vec<String> = l.clock_via.iter().map(|v| d.delay_label(lib, v)).collect();
        launches.push(format!(
            "launch {} {:?} via {via:?} {} -> {}",
            l.name,
            l.edge,
            d.delay_label(lib, &l.delay),
            d.signals[l.to]
        ));
    }
    launches.sort();
    out.extend(launches);
    let mut arcs: Vec<String> = d
        .arcs
        .iter()
        .map(|a| {
            format!(
                "arc {} -> {} -> {}",
                d.signals[a.from],
                d.delay_label(lib, &a.delay),
                d.signals[a.to]
            )
        })
        .collect();
    arcs.sort();
    out.extend(arcs);
    for c in &d.captures {
        let via: Vec<String> = c.clock_via.iter().map(|v| d.delay_label(lib, v)).collect();
        let check = |x: &Option<slackmeter::budget::design::Delay>| {
            x.as_ref().map(|x| d.delay_label(lib, x))
        };
        out.push(format!(
            "capture {} {} {:?} via {via:?} setup {:?} hold {:?}",
            c.name,
            d.signals[c.signal],
            c.edge,
            check(&c.setup),
            check(&c.hold)
        ));
    }
    out
}

#[test]
fn compact_demo_is_the_long_demo_to_the_last_digit() {
    let lib = Library::builtin();
    let compact = parse("designs/larkspur-8.toml", DEMO_DESIGN, &lib);
    let long = parse("tests/fixtures/larkspur-8-long.toml", LONG, &lib);
    assert_eq!(outline(&compact, &lib), outline(&long, &lib));
    assert_eq!(compact.warnings, long.warnings);
    let far_low = OperatingPoint {
        section_vcc_v: BTreeMap::from([("far".to_string(), 4.62)]),
        ..OperatingPoint::of(&long)
    };
    let points = [
        OperatingPoint::of(&long),
        far_low,
        OperatingPoint {
            vcc_v: 4.5,
            temp_c: 85.0,
            ..OperatingPoint::of(&long)
        },
        OperatingPoint {
            corner: Corner::Typ,
            vcc_v: 3.3,
            ..OperatingPoint::of(&long)
        },
    ];
    for op in &points {
        for duty in [None, Some(0.4)] {
            let a = serde_json::to_string(&solve(&compact, &lib, op, None, duty)).unwrap();
            let b = serde_json::to_string(&solve(&long, &lib, op, None, duty)).unwrap();
            assert_eq!(a, b, "at {op:?}, duty {duty:?}");
        }
    }
    let a = serde_json::to_string(&sweep_vcc(&compact, &lib, &points[0], 2.0, 6.0, 9)).unwrap();
    let b = serde_json::to_string(&sweep_vcc(&long, &lib, &points[0], 2.0, 6.0, 9)).unwrap();
    assert_eq!(a, b, "supply sweep");
    // the supply wiring tables, written inline, give the same power budget
    let data = SupplyData::builtin();
    let pt = PowerPoint {
        freq_hz: 2e6,
        data_activity: 0.25,
        temp_c: 25.0,
    };
    let wa = Wiring::of(&compact).unwrap().expect("wiring");
    let wb = Wiring::of(&long).unwrap().expect("wiring");
    assert_eq!(wa, wb);
    let pa = serde_json::to_string(&power::solve(&compact, &lib, &data, &wa, &pt)).unwrap();
    let pb = serde_json::to_string(&power::solve(&long, &lib, &data, &wb, &pt)).unwrap();
    assert_eq!(pa, pb, "power budget");
}

#[test]
fn compact_demo_is_a_third_of_the_lines_and_still_commented() {
    let (compact, long) = (DEMO_DESIGN.lines().count(), LONG.lines().count());
    assert!(3 * compact <= long, "{compact} lines against {long}");
    let comments = DEMO_DESIGN
        .lines()
        .filter(|l| l.trim_start().starts_with('#') || l.contains("  # "))
        .count();
    assert!(comments >= 40, "only {comments} commented lines");
    // every compact form is shown, and a long table mixed in
    for form in [
        "refs = [",
        "[[register]]",
        "[[bus]]",
        "chains = [",
        "clock_via = [\"",
        "[[capture]]",
    ] {
        assert!(DEMO_DESIGN.contains(form), "the demo shows no {form}");
    }
}

#[test]
fn budget_json_of_both_demo_files_is_identical_on_the_command_line() {
    let root = env!("CARGO_MANIFEST_DIR");
    let run = |file: &str| {
        let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
            .args(["budget", &format!("{root}/{file}"), "--json"])
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        out.stdout
    };
    let a = run("designs/larkspur-8.toml");
    let b = run("tests/fixtures/larkspur-8-long.toml");
    assert!(a.len() > 1000);
    assert_eq!(String::from_utf8(a).unwrap(), String::from_utf8(b).unwrap());
}

/// A small machine in long tables: two registers through a buffer onto a bus, a fall-edge
/// register through an inverter, a fixed-delay sink.
const SMALL_LONG: &str = r#"
[design]
name = "small"

[[part]]
ref = "U1"
type = "74HC574"
[[part]]
ref = "U2"
type = "74HC574"
[[part]]
ref = "U3"
type = "74HC245"
[[part]]
ref = "U4"
type = "74HC245"
[[part]]
ref = "U5"
type = "74HC04"
[[part]]
ref = "U6"
type = "74HC574"
section = "s"

[[section]]
name = "s"

[[launch]]
name = "first"
edge = "rise"
part = "U1"
arc = "CLK->Q"
to = "q1"
[[launch]]
name = "second"
edge = "rise"
part = "U2"
arc = "CLK->Q"
to = "q2"
[[launch]]
name = "late"
edge = "fall"
part = "U6"
arc = "CLK->Q"
to = "q6"
clock_via = [{ part = "U5", arc = "A->Y" }]

[[arc]]
from = "q1"
to = "en"
part = "U5"
arc = "A->Y"
[[arc]]
from = "q1"
to = "bus"
part = "U3"
arc = "A->B"
[[arc]]
from = "en"
to = "bus"
part = "U3"
arc = "OE->B"
[[arc]]
from = "q2"
to = "bus"
part = "U4"
arc = "A->B"
[[arc]]
from = "q6"
to = "bus"
part = "U4"
arc = "A->B"

[[capture]]
name = "second D"
signal = "bus"
edge = "rise"
part = "U2"
check = "D->CLK"
[[capture]]
name = "late D"
signal = "bus"
edge = "fall"
part = "U6"
check = "D->CLK"
clock_via = [{ part = "U5", arc = "A->Y" }]
[[capture]]
name = "port"
signal = "bus"
edge = "rise"
setup = "10 ns"
hold = "2 ns"
"#;

/// The same machine in the compact forms.
const SMALL_COMPACT: &str = r#"
design = { name = "small" }
section = [{ name = "s" }]
part = [
  { refs = ["U1", "U2"], type = "74HC574" },
  { refs = ["U3", "U4"], type = "74HC245" },
  { ref = "U5", type = "74HC04" },
]
chains = ["q1 -> U5 A->Y -> en"]

[[register]]
edge = "rise"
members = [
  { ref = "U1", name = "first", q = "q1" },
  { ref = "U2", name = "second", q = "q2", d = "bus" },
]

[[register]]
edge = "fall"
type = "74HC574"
section = "s"
clock_via = ["U5 A->Y"]
members = [{ ref = "U6", name = "late", q = "q6", d = "bus" }]

[[bus]]
signal = "bus"
data_arc = "A->B"
enable_arc = "OE->B"
drivers = [
  { part = "U3", from = "q1", enable = "en" },
  { part = "U4", from = ["q2", "q6"] },
]
sinks = [{ name = "port", edge = "rise", setup = "10 ns", hold = "2 ns" }]
"#;

#[test]
fn each_compact_form_expands_to_the_long_tables_it_stands_for() {
    let lib = Library::builtin();
    let long = parse("long.toml", SMALL_LONG, &lib);
    let compact = parse("compact.toml", SMALL_COMPACT, &lib);
    assert_eq!(outline(&compact, &lib), outline(&long, &lib));
    let op = OperatingPoint::of(&long);
    assert_eq!(
        serde_json::to_string(&solve(&compact, &lib, &op, None, None)).unwrap(),
        serde_json::to_string(&solve(&long, &lib, &op, None, None)).unwrap()
    );
}

/// A board with one register fed from the bus and driving it through a buffer.
const BOARD: &str = r#"
# a register board: its own parts and paths; "bus" and "CLKBUF" come from the design
design = { name = "register board" }
part = [
  { ref = "U1", type = "74HC574" },
  { ref = "U2", type = "74HC245" },
]
chains = ["q -> U2 A->B -> bus"]

[[register]]
edge = "rise"
members = [{ ref = "U1", name = "board register", q = "q", d = "bus" }]
"#;

const BOARDS: &str = r#"
design = { name = "two boards" }
section = [{ name = "far" }]
part = [{ ref = "U9", type = "74HC574" }]
include = [
  { file = "board.toml", prefix = "b1_", connect = { bus = "bus" } },
  { file = "board.toml", prefix = "b2_", connect = { bus = "bus" }, section = "far" },
]

[[register]]
edge = "rise"
members = [{ ref = "U9", name = "main", q = "bus" }]
"#;

#[test]
fn includes_prefix_their_names_and_connect_the_named_signals() {
    let lib = Library::builtin();
    let files = InMemory(vec![("board.toml".into(), BOARD.into())]);
    let d = Design::parse_with(Source::new("boards.toml", BOARDS), &lib, &files)
        .unwrap_or_else(|e| panic!("{e:?}"));
    let refs: Vec<&str> = d.instances.iter().map(|i| i.reference.as_str()).collect();
    assert_eq!(refs, ["U9", "b1_U1", "b1_U2", "b2_U1", "b2_U2"]);
    let sections: Vec<Option<usize>> = d.instances.iter().map(|i| i.section).collect();
    assert_eq!(sections, [None, None, None, Some(0), Some(0)]);
    let mut signals = d.signals.clone();
    signals.sort();
    assert_eq!(signals, ["b1_q", "b2_q", "bus"]);
    let captures: Vec<&str> = d.captures.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(captures, ["board register D", "board register D"]);
    // the same machine by hand: each board's path bus → register → buffer → bus
    let by_hand = r#"
design = { name = "two boards" }
section = [{ name = "far" }]
part = [
  { ref = "U9", type = "74HC574" },
  { ref = "b1_U1", type = "74HC574" }, { ref = "b1_U2", type = "74HC245" },
  { ref = "b2_U1", type = "74HC574", section = "far" }, { ref = "b2_U2", type = "74HC245", section = "far" },
]
chains = ["b1_q -> b1_U2 A->B -> bus", "b2_q -> b2_U2 A->B -> bus"]
[[register]]
edge = "rise"
members = [
  { ref = "b1_U1", name = "board register", q = "b1_q", d = "bus" },
  { ref = "b2_U1", name = "board register", q = "b2_q", d = "bus" },
  { ref = "U9", name = "main", q = "bus" },
]
"#;
    let h = Design::parse_with(Source::new("by-hand.toml", by_hand), &lib, &NoIncludes)
        .unwrap_or_else(|e| panic!("{e:?}"));
    let op = OperatingPoint {
        section_vcc_v: BTreeMap::from([("far".to_string(), 4.5)]),
        ..OperatingPoint::of(&h)
    };
    assert_eq!(
        serde_json::to_string(&solve(&d, &lib, &op, None, None)).unwrap(),
        serde_json::to_string(&solve(&h, &lib, &op, None, None)).unwrap()
    );
}

#[test]
fn an_error_in_an_included_file_points_into_it_and_names_the_include() {
    let lib = Library::builtin();
    let board = BOARD.replace("U2 A->B", "U2 A->Q");
    let files = InMemory(vec![("board.toml".into(), board.clone())]);
    let e = Design::parse_with(Source::new("boards.toml", BOARDS), &lib, &files).unwrap_err();
    assert_eq!(e.file, "board.toml");
    assert!(e.message.contains("has no arc \"A->Q\""), "{}", e.message);
    let line = board.lines().position(|l| l.contains("A->Q")).unwrap() + 1;
    let col = board.lines().nth(line - 1).unwrap().find("A->Q").unwrap() + 1;
    assert_eq!((e.line, e.column), (line, col));
    let help = e.help.as_deref().unwrap();
    assert!(
        help.contains("this file is included at boards.toml:6:"),
        "{help}"
    );
    // a file read without access to other files refuses includes at the include
    let e = Design::parse_with(Source::new("boards.toml", BOARDS), &lib, &NoIncludes).unwrap_err();
    assert_eq!((e.file.as_str(), e.line), ("boards.toml", 6));
    assert!(
        e.message.contains("cannot read included file"),
        "{}",
        e.message
    );
    // a loop through two files is named file by file
    let files = InMemory(vec![
        (
            "a.toml".into(),
            "design = { name = \"a\" }\ninclude = [{ file = \"b.toml\" }]\n".into(),
        ),
        (
            "b.toml".into(),
            "design = { name = \"b\" }\ninclude = [{ file = \"a.toml\" }]\n".into(),
        ),
    ]);
    let top = "design = { name = \"top\" }\ninclude = [{ file = \"a.toml\" }]\n";
    let e = Design::parse_with(Source::new("top.toml", top), &lib, &files).unwrap_err();
    assert_eq!(e.file, "b.toml");
    assert!(
        e.message
            .contains("include loop: top.toml includes a.toml includes b.toml includes a.toml"),
        "{}",
        e.message
    );
}

#[test]
fn compact_and_long_tables_mix_in_one_file_in_file_order() {
    let lib = Library::builtin();
    // the long demo with a compact capture group appended: file order is kept
    let text = format!(
        "{LONG}\n[[register]]\nedge = \"rise\"\nmembers = [{{ ref = \"U1\", name = \"next nibble\", d = \"bus\" }}]\n\
         [[capture]]\nname = \"last\"\nsignal = \"bus\"\nedge = \"rise\"\nsetup = \"1 ns\"\n"
    );
    let d = parse("mixed.toml", &text, &lib);
    let names: Vec<&str> = d.captures.iter().map(|c| c.name.as_str()).collect();
    assert_eq!(names[names.len() - 2..], ["next nibble D", "last"]);
}

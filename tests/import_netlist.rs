//! `slackmeter import`: a KiCad netlist (the S-expression export) as a design file. A small
//! invented two-stage machine is written as a netlist here; its import resolves to the design
//! written by hand from the same schematic, with the same budget; an unknown part, a floating
//! input and two fighting outputs are listed as TODOs; random damage never panics.

use std::collections::BTreeMap;
use std::process::Command;

use slackmeter::budget::design::NoIncludes;
use slackmeter::budget::{Design, Library, OperatingPoint, solve};
use slackmeter::diag::Source;
use slackmeter::import::{self, Options};

/// A netlist in KiCad's export format from (reference, value, sheet) components and
/// (net, [(reference, pin)]) nets; the fields an import ignores are written too.
pub fn netlist(comps: &[(&str, &str, &str)], nets: &[(&str, Vec<(&str, u32)>)]) -> String {
    let mut s = String::from(
        "(export (version \"E\")\n  (design (source \"/home/bench/machine.kicad_sch\") (date \"2026-12-03\") (tool \"Eeschema 8.0.4\"))\n  (components\n",
    );
    for (r, v, sheet) in comps {
        s += &format!(
            "    (comp (ref \"{r}\") (value \"{v}\") (footprint \"Package_DIP:DIP-20_W7.62mm\")\n      (libsource (lib \"74xx\") (part \"{v}\") (description \"\"))\n      (sheetpath (names \"{sheet}\") (tstamps \"/\")) (tstamps \"0a1b\"))\n"
        );
    }
    s += "  )\n  (nets\n";
    for (i, (name, nodes)) in nets.iter().enumerate() {
        s += &format!(
            "    (net (code \"{}\") (name \"{name}\") (class \"Default\")\n",
            i + 1
        );
        for (r, p) in nodes {
            s += &format!("      (node (ref \"{r}\") (pin \"{p}\") (pintype \"passive\"))\n");
        }
        s += "    )\n";
    }
    s + "  )\n)\n"
}

/// The invented two-stage machine: register U1 (CLK↑) → inverter U2 → register U3 (clocked
/// through U2's first gate, so on CLK↓) → bus driver U4 (enabled by decoder U5) → back to U1.
fn two_stage() -> String {
    let comps = [
        ("U1", "74HC574", "/"),
        ("U2", "74HC04", "/"),
        ("U3", "74HC574", "/"),
        ("U4", "SN74HC245N", "/bus/"),
        ("U5", "74HC138", "/bus/"),
        ("R1", "10k", "/"),
        ("Y1", "8MHz", "/"),
    ];
    let nets = vec![
        ("/CLK", vec![("Y1", 8), ("U1", 11), ("U2", 1)]),
        ("/nCLK", vec![("U2", 2), ("U3", 11)]),
        ("/A0", vec![("U1", 19), ("U2", 3), ("U5", 1)]),
        ("/A1", vec![("U1", 18), ("U3", 3), ("U5", 2)]),
        ("/NA0", vec![("U2", 4), ("U3", 2)]),
        ("/C0", vec![("U3", 19), ("U4", 2)]),
        ("/C1", vec![("U3", 18), ("U4", 3)]),
        ("/bus/SEL", vec![("U5", 15), ("U4", 19), ("R1", 1)]),
        ("/B0", vec![("U4", 18), ("U1", 2)]),
        ("/B1", vec![("U4", 17), ("U1", 3)]),
        (
            "GND",
            vec![
                ("U1", 1),
                ("U1", 4),
                ("U1", 5),
                ("U1", 6),
                ("U1", 7),
                ("U1", 8),
                ("U1", 9),
                ("U1", 10),
                ("U2", 5),
                ("U2", 7),
                ("U2", 9),
                ("U2", 11),
                ("U2", 13),
                ("U3", 1),
                ("U3", 4),
                ("U3", 5),
                ("U3", 6),
                ("U3", 7),
                ("U3", 8),
                ("U3", 9),
                ("U3", 10),
                ("U4", 4),
                ("U4", 5),
                ("U4", 6),
                ("U4", 7),
                ("U4", 8),
                ("U4", 9),
                ("U4", 10),
                ("U5", 3),
                ("U5", 4),
                ("U5", 5),
                ("U5", 8),
            ],
        ),
        (
            "+5V",
            vec![
                ("U1", 20),
                ("U2", 14),
                ("U3", 20),
                ("U4", 1),
                ("U4", 20),
                ("U5", 6),
                ("U5", 16),
                ("R1", 2),
            ],
        ),
    ];
    netlist(&comps, &nets)
}

fn map() -> BTreeMap<String, String> {
    BTreeMap::from([("SN74HC245N".to_string(), "74HC245".to_string())])
}

fn run_import(text: &str, clock: &str) -> Result<import::Import, String> {
    let src = Source::new("machine.net", text);
    let n = import::parse(&src).map_err(|e| e.to_string())?;
    let m = map();
    import::import(
        &n,
        &Library::builtin(),
        &Options {
            clock,
            map: &m,
            name: "two-stage",
            source: "machine.net",
            sections: &[],
        },
    )
}

/// The same machine written by hand from the schematic (nets as signals, pins as arcs).
const BY_HAND: &str = r#"
design = { name = "two-stage" }
section = [{ name = "bus" }]
part = [
  { refs = ["U1", "U3"], type = "74HC574" },
  { ref = "U2", type = "74HC04" },
  { ref = "U4", type = "74HC245", section = "bus" },
  { ref = "U5", type = "74HC138", section = "bus" },
]
chains = [
  "A0 -> U2 A->Y -> NA0",
  "C0 -> U4 A->B -> B0",
  "C1 -> U4 A->B -> B1",
  "bus/SEL -> U4 OE->B -> B0, B1",
  "A0, A1 -> U5 A->Y -> bus/SEL",
]
[[register]]
edge = "rise"
members = [{ ref = "U1", q = ["A0", "A1"], d = ["B0", "B1"] }]
[[register]]
edge = "fall"
clock_via = ["U2 A->Y"]
members = [{ ref = "U3", q = ["C0", "C1"], d = ["NA0", "A1"] }]
"#;

#[test]
fn the_imported_machine_is_the_one_written_by_hand() {
    let lib = Library::builtin();
    let done = run_import(&two_stage(), "CLK").unwrap();
    assert!(done.todos.is_empty(), "{:#?}\n{}", done.todos, done.design);
    assert_eq!(done.skipped, ["R1", "Y1"]);
    let got = Design::parse_with(
        Source::new("imported.toml", done.design.clone()),
        &lib,
        &NoIncludes,
    )
    .unwrap_or_else(|e| panic!("{e:?}\n{}", done.design));
    let want = Design::parse_with(Source::new("by-hand.toml", BY_HAND), &lib, &NoIncludes).unwrap();
    let words = |d: &Design| {
        let mut v: Vec<String> = d
            .arcs
            .iter()
            .map(|a| {
                format!(
                    "{} -> {} -> {}",
                    d.signals[a.from],
                    d.delay_label(&lib, &a.delay),
                    d.signals[a.to]
                )
            })
            .chain(d.launches.iter().map(|l| {
                format!(
                    "launch {:?} {} {}",
                    l.edge,
                    d.delay_label(&lib, &l.delay),
                    d.signals[l.to]
                )
            }))
            .chain(d.captures.iter().map(|c| {
                format!(
                    "capture {:?} {} {} vias {}",
                    c.edge,
                    d.signals[c.signal],
                    c.setup
                        .as_ref()
                        .map(|s| d.delay_label(&lib, s))
                        .unwrap_or_default(),
                    c.clock_via.len()
                )
            }))
            .collect();
        v.sort();
        v
    };
    assert_eq!(words(&got), words(&want));
    let op = OperatingPoint::of(&want);
    let a = solve(&got, &lib, &op, None, None);
    let b = solve(&want, &lib, &op, None, None);
    assert_eq!(
        (a.low_required_ns, a.high_required_ns, a.period_required_ns),
        (b.low_required_ns, b.high_required_ns, b.period_required_ns)
    );
    // the header says where it came from and that no delay is made up
    assert!(
        done.design.starts_with("# Imported from machine.net"),
        "{}",
        done.design
    );
}

#[test]
fn what_it_cannot_decide_is_listed_with_the_part_pin_and_net() {
    let base = two_stage();
    // an unknown part
    let unknown = base.replace("(value \"74HC138\")", "(value \"XQ9000\")");
    let t = run_import(&unknown, "CLK").unwrap().todos;
    assert!(
        t.iter()
            .any(|x| x.starts_with("U5: value \"XQ9000\" is no library part")
                && x.contains("pin 15 on /bus/SEL")),
        "{t:#?}"
    );
    // a floating input: U3's D pin 3 taken off its net
    let floating = base.replace("(node (ref \"U3\") (pin \"3\") (pintype \"passive\"))", "");
    let t = run_import(&floating, "CLK").unwrap().todos;
    assert!(
        t.iter()
            .any(|x| x == "U3 pin 3 (2D) is not connected: a floating input pin"),
        "{t:#?}"
    );
    // an input on a net nothing drives: U2's 3rd gate input moved onto a new net
    let undriven = base
        .replace("(node (ref \"U5\") (pin \"4\") (pintype \"passive\"))", "")
        .replace(
            "(net (code \"1\")",
            "(net (code \"99\") (name \"/LOOSE\") (node (ref \"U5\") (pin \"4\")))\n    (net (code \"1\")",
        );
    let t = run_import(&undriven, "CLK").unwrap().todos;
    assert!(
        t.iter()
            .any(|x| x.contains("U5 pin 4 (E1) is on net /LOOSE, which nothing drives")),
        "{t:#?}"
    );
    // two outputs without an enable on one net: U2's 2Y onto /A0 as well
    let fight = base.replace("(node (ref \"U2\") (pin \"4\") (pintype \"passive\"))", "")
        .replace("(node (ref \"U2\") (pin \"3\") (pintype \"passive\"))", "(node (ref \"U2\") (pin \"3\") (pintype \"passive\")) (node (ref \"U2\") (pin \"4\") (pintype \"passive\"))");
    let t = run_import(&fight, "CLK").unwrap().todos;
    assert!(
        t.iter()
            .any(|x| x.starts_with("net /A0 is driven by U1 pin 19 (1Q) and U2 pin 4 (2Y)")),
        "{t:#?}"
    );
    // a clock through a gate it cannot classify
    let gated = base.replace("(value \"74HC04\")", "(value \"74HC86\")");
    let t = run_import(&gated, "CLK").unwrap().todos;
    assert!(
        t.iter()
            .any(|x| x.contains("not a buffer or inverter this import can follow")),
        "{t:#?}"
    );
    // the TODOs are in the design as comments, and the design still reads
    let done = run_import(&unknown, "CLK").unwrap();
    assert!(
        done.design.contains("# TODO U5: value \"XQ9000\""),
        "{}",
        done.design
    );
    Design::parse_with(
        Source::new("t.toml", done.design.clone()),
        &Library::builtin(),
        &NoIncludes,
    )
    .unwrap_or_else(|e| panic!("{e:?}\n{}", done.design));
    // a capture of a net only an unknown part drives is left out, and said so
    let no_driver = base.replace("(value \"SN74HC245N\")", "(value \"XQ245\")");
    let done = run_import(&no_driver, "CLK").unwrap();
    assert!(
        done.todos
            .iter()
            .any(|x| x.starts_with("U1 D->CLK: net B0 is driven by no part this import times")),
        "{:#?}",
        done.todos
    );
    Design::parse_with(
        Source::new("t.toml", done.design.clone()),
        &Library::builtin(),
        &NoIncludes,
    )
    .unwrap_or_else(|e| panic!("{e:?}\n{}", done.design));
    // a clock net that is not there
    let e = run_import(&base, "MCLK").unwrap_err();
    assert!(e.contains("no net named \"MCLK\""), "{e}");
}

#[test]
fn damaged_netlists_never_panic() {
    let base: Vec<char> = two_stage().chars().collect();
    let alphabet: Vec<char> = "()\" \\\n0123456789abcUVnetpinref/-".chars().collect();
    let mut x: u64 = 0x1e7;
    let mut rnd = |n: usize| {
        x ^= x << 13;
        x ^= x >> 7;
        x ^= x << 17;
        (x % n as u64) as usize
    };
    let lib = Library::builtin();
    let (mut read, mut refused) = (0, 0);
    for _ in 0..500 {
        let mut t = base.clone();
        for _ in 0..1 + rnd(4) {
            let at = rnd(t.len());
            match rnd(3) {
                0 => {
                    t.remove(at);
                }
                1 => t.insert(at, alphabet[rnd(alphabet.len())]),
                _ => t[at] = alphabet[rnd(alphabet.len())],
            }
        }
        let text: String = t.into_iter().collect();
        let lines = text.lines().count() + 1;
        match import::parse(&Source::new("m.net", text.as_str())) {
            Ok(n) => {
                read += 1;
                let m = map();
                let o = Options {
                    clock: "CLK",
                    map: &m,
                    name: "m",
                    source: "m.net",
                    sections: &[],
                };
                if let Ok(done) = import::import(&n, &lib, &o) {
                    let _ =
                        Design::parse_with(Source::new("m.toml", done.design), &lib, &NoIncludes);
                }
            }
            Err(e) => {
                refused += 1;
                assert!(e.line >= 1 && e.line <= lines, "line {} of {lines}", e.line);
            }
        }
    }
    assert!(read > 0 && refused > 0, "{read} read, {refused} refused");
}

#[test]
fn the_command_writes_the_design_and_lists_the_todos_on_stderr() {
    let dir = std::env::temp_dir().join(format!("slackmeter-import-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let net = dir.join("machine.net");
    std::fs::write(
        &net,
        two_stage().replace("(value \"74HC138\")", "(value \"XQ9000\")"),
    )
    .unwrap();
    let map = dir.join("map.toml");
    std::fs::write(&map, "\"SN74HC245N\" = \"74HC245\"\n").unwrap();
    let out = dir.join("machine.toml");
    let run = |extra: &[&str]| {
        Command::new(env!("CARGO_BIN_EXE_slackmeter"))
            .arg("import")
            .arg(&net)
            .args(["--clock", "CLK", "--map"])
            .arg(&map)
            .args(extra)
            .output()
            .unwrap()
    };
    let o = run(&["-o", out.to_str().unwrap()]);
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("TODO U5: value \"XQ9000\""), "{err}");
    assert!(err.contains("left out 2 passives"), "{err}");
    let design = std::fs::read_to_string(&out).unwrap();
    assert!(design.contains("[[register]]"), "{design}");
    // an existing file is not replaced without --force
    let o = run(&["-o", out.to_str().unwrap()]);
    assert_eq!(
        o.status.code(),
        Some(2),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    // a truncated netlist is a located input error
    std::fs::write(&net, &two_stage()[..400]).unwrap();
    let o = run(&[]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("machine.net:") && err.contains("not a readable S-expression"),
        "{err}"
    );
    let _ = std::fs::remove_dir_all(&dir);
}

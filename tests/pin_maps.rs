//! Package pins of the library's parts against the data sheets' pin tables: every part the demo
//! machine uses has its pins, each pin's number and name as the cited sheet prints it, every arc
//! has its pins, and `slackmeter parts NAME` shows them.

use std::process::Command;

use slackmeter::budget::library::ArcKind;
use slackmeter::budget::library::pins::PinRole;
use slackmeter::budget::{Design, Library};

/// (type, pin number, data-sheet name) as read in the sheets each pinout cites.
const FROM_THE_SHEETS: &[(&str, u32, &str)] = &[
    // TI SN74HC574 SCLS148F, pin diagram (N package, top view)
    ("74HC574", 1, "OE"),
    ("74HC574", 2, "1D"),
    ("74HC574", 9, "8D"),
    ("74HC574", 11, "CLK"),
    ("74HC574", 12, "8Q"),
    ("74HC574", 19, "1Q"),
    // NXP 74HC04 Rev. 4 (2012), Table 2
    ("74HC04", 1, "1A"),
    ("74HC04", 2, "1Y"),
    ("74HC04", 8, "4Y"),
    ("74HC04", 13, "6A"),
    // Motorola MC54/74HC161A (REV 6, 10/95), pin assignment (RESET, CLOCK, ENABLE P, LOAD,
    // ENABLE T, RIPPLE CARRY OUT: the library's CLR, CLK, CEP, LOAD, CET, TC)
    ("74HC161", 1, "CLR"),
    ("74HC161", 2, "CLK"),
    ("74HC161", 3, "D0"),
    ("74HC161", 7, "CEP"),
    ("74HC161", 9, "LOAD"),
    ("74HC161", 10, "CET"),
    ("74HC161", 14, "Q0"),
    ("74HC161", 15, "TC"),
    // onsemi SN54/74LS173A, connection diagram (IE1, CP: the library's E1, CLK)
    ("74HC173", 1, "OE1"),
    ("74HC173", 7, "CLK"),
    ("74HC173", 9, "E1"),
    ("74HC173", 14, "D0"),
    ("74HC173", 15, "MR"),
    // Philips 74HC283 Rev. 03 (2004): CIN, A1, B1 on pins 5–7; Hitachi HD74AC283: C4 on pin 9
    ("74HC283", 5, "A1"),
    ("74HC283", 6, "B1"),
    ("74HC283", 7, "CIN"),
    ("74HC283", 9, "COUT"),
    // Philips 74HC245 Rev. 03 (2005), Table 3 (the part seen: pins 17–20)
    ("74HC245", 17, "B1"),
    ("74HC245", 18, "B0"),
    ("74HC245", 19, "OE"),
    ("74HC245", 20, "VCC"),
    // Atmel AT28C256 Rev. 0006H–12/99, pin configurations (PDIP, top view)
    ("AT28C256-20", 1, "A14"),
    ("AT28C256-20", 10, "A0"),
    ("AT28C256-20", 11, "I/O0"),
    ("AT28C256-20", 20, "CE"),
    ("AT28C256-20", 22, "OE"),
    ("AT28C256-20", 27, "WE"),
    // TI SN74AHC86 SCLS249J, pin diagram (the '86 pinout; secondary for the 74HC86)
    ("74HC86", 3, "1Y"),
    ("74HC86", 13, "4B"),
    // TI SN74HC00 SCLS181E (2003), pin diagram (N package, top view); the same table serves the
    // 74LS00 (TI SDLS025D pin table)
    ("74HC00", 3, "1Y"),
    ("74HC00", 8, "3Y"),
    ("74LS00/ti", 13, "4B"),
    // NXP 74HC08; 74HCT08 Rev. 4 (2012), Table 2: 1Y–4Y on 3, 6, 8, 11
    ("74HC08", 6, "2Y"),
    ("74HCT08", 11, "4Y"),
    ("74HC08", 12, "4A"),
    // TI CD74AC02 pin functions (secondary for the 74HC02): outputs first
    ("74HC02", 1, "1Y"),
    ("74HC02", 2, "1A"),
    ("74HC02", 10, "3Y"),
    // Nexperia 74HC30; 74HCT30 Rev. 7 (2015), Table 2: Y 8, n.c. 9, 10, 13, G 11, H 12
    ("74HC30", 8, "Y"),
    ("74HC30", 9, "NC"),
    ("74HC30", 11, "G"),
    ("74HC30", 13, "NC"),
    // TI SN74AHC74 JAJSQP0N (2024), pin functions (secondary for the 74HC74)
    ("74HC74", 1, "1CLR"),
    ("74HC74", 3, "1CLK"),
    ("74HC74", 4, "1PRE"),
    ("74HC74", 6, "1QN"),
    ("74HC74", 9, "2Q"),
    ("74LS74", 11, "2CLK"),
    // Motorola MC54/74HCT374A (REV 7, 2/97), pin assignment
    ("74HCT374", 1, "OE"),
    ("74HCT374", 2, "Q0"),
    ("74HCT374", 3, "D0"),
    ("74HCT374", 11, "CLK"),
    ("74HCT374", 19, "Q7"),
    // TI SN74HC377 SCLS307B (2003), pin diagram
    ("74HC377", 1, "CLKEN"),
    ("74HC377", 2, "1Q"),
    ("74HC377", 11, "CLK"),
    ("74HC377", 18, "8D"),
    // Motorola MC54/74HCT161A/163A (REV 2, 10/95), pinout (the '161 table serves the '163)
    ("74HC163", 1, "CLR"),
    ("74HCT161", 15, "TC"),
    // a pin database quoting the NXP 74HC573, 74HC373, 74HC157, 74HC151, 74HC165, 74HC595,
    // 74HC240/244/541 sheets (secondary)
    ("74HC573", 1, "OE"),
    ("74HC573", 11, "LE"),
    ("74HC573", 12, "Q7"),
    ("74HC573", 19, "Q0"),
    ("74HC373", 3, "D0"),
    ("74HC373", 11, "LE"),
    ("74HC157", 1, "S"),
    ("74HC157", 4, "1Y"),
    ("74HC157", 15, "E"),
    ("74HC151", 5, "Y"),
    ("74HC151", 11, "S0"),
    ("74HC165", 1, "PL"),
    ("74HC165", 6, "D7"),
    ("74HC165", 9, "Q7"),
    ("74HC595", 9, "Q7S"),
    ("74HC595", 11, "SHCP"),
    ("74HC595", 12, "STCP"),
    ("74HC595", 15, "Q0"),
    ("74HC244", 17, "2A0"),
    ("74HC244", 3, "2Y0"),
    ("74HC541", 19, "OE2"),
    ("74HC541", 18, "Y0"),
    // the same database's HEF4040B table, stages renamed to TI's CD74HC4040 numbers (secondary)
    ("74HC4040", 9, "Q1"),
    ("74HC4040", 10, "CLK"),
    ("74HC4040", 11, "MR"),
    ("74HC4040", 1, "Q12"),
    // Cypress CY62256 (fax id 1068), pin configurations SOIC/DIP (its own address numbering)
    ("CY62256-55", 1, "A5"),
    ("CY62256-55", 20, "CE"),
    ("CY62256-55", 21, "A0"),
    ("CY62256-55", 27, "WE"),
    // Atmel AT28C64 Rev. 0001H–12/99, PDIP (secondary for the AT28C64B): NC 26, WE 27
    ("AT28C64B-15", 26, "NC"),
    ("AT28C64B-15", 27, "WE"),
    // a wiki page's 6116 diagram citing the IDT 6116 sheet (secondary for the HT6116)
    ("HT6116-70", 18, "CE"),
    ("HT6116-70", 21, "WE"),
];

/// Library types whose pinouts this file's sources give (the 74-series types and memories of
/// issue 20's list; the 555 timer's arcs name output edges, not pins, and it has none).
const MAPPED: &[&str] = &[
    "74HC00",
    "74HCT00",
    "74LS00",
    "74ACT00",
    "74HC02",
    "74HCT02",
    "74HC04",
    "74HCT04",
    "74LS04",
    "74AC04",
    "74ACT04",
    "74HC08",
    "74HCT08",
    "74LS08",
    "74ACT08",
    "74HC14",
    "74HCT14",
    "74HC30",
    "74HC32",
    "74HCT32",
    "74LS32",
    "74ACT32",
    "74HC86",
    "74HCT86",
    "74LS86",
    "74HC74",
    "74HCT74",
    "74LS74",
    "74AC74",
    "74ACT74",
    "74HC161",
    "74HCT161",
    "74LS161",
    "74HC163",
    "74LS163",
    "74HC4040",
    "74HC164",
    "74HCT164",
    "74HC165",
    "74HC595",
    "74HC173",
    "74LS173",
    "74ACT174",
    "74LS273",
    "74HC374",
    "74HCT374",
    "74LS374",
    "74HC574",
    "74HCT574",
    "74HC373",
    "74HC573",
    "74HC377",
    "74LS377",
    "74HC138",
    "74HCT138",
    "74LS138",
    "74ACT138",
    "74HCT139",
    "74HC151",
    "74HC157",
    "74HCT157",
    "74LS157",
    "74HC240",
    "74HC244",
    "74HCT244",
    "74HC245",
    "74HCT245",
    "74LS245",
    "74AC245",
    "74HC283",
    "74LS283",
    "74HC541",
    "AT28C256-15",
    "AT28C256-20",
    "AT28C256-25",
    "AT28C64B-15",
    "AT28HC64B-70",
    "AT28C16-15",
    "28C64A-12",
    "AT27C256R-45",
    "IC61C256AH-10",
    "HT6116-70",
    "CY62256-55",
    "62256-70",
];

#[test]
fn pins_are_numbered_and_named_as_the_cited_sheets_print_them() {
    let lib = Library::builtin();
    for &(part, number, name) in FROM_THE_SHEETS {
        let p = lib
            .pinout(part)
            .unwrap_or_else(|| panic!("no pinout for {part}"));
        let pin = &p.pins[number as usize - 1];
        assert_eq!((pin.number, pin.name.as_str()), (number, name), "{part}");
    }
}

#[test]
fn every_part_of_the_demo_machine_has_its_pins_and_every_arc_its_pins() {
    let lib = Library::builtin();
    let d = Design::demo(&lib);
    for i in &d.instances {
        let part = &lib.parts[i.part];
        let p = lib
            .pinout(&part.type_name)
            .unwrap_or_else(|| panic!("{} ({}) has no pinout", i.reference, part.type_name));
        let n = p.pins.len();
        assert_eq!(p.package, format!("DIP-{n}"));
        // corner power: ground on the last pin of the first row, supply on the last pin (each
        // sheet cited shows it for these parts)
        assert_eq!(
            p.pins[n / 2 - 1].role,
            PinRole::Ground,
            "{}",
            part.type_name
        );
        assert_eq!(p.pins[n - 1].role, PinRole::Power, "{}", part.type_name);
        // every arc of the part has pins on both of its sides (or is a state such as Z)
        for a in &part.arcs {
            let with_pins = p
                .pins
                .iter()
                .filter(|pin| {
                    slackmeter::budget::library::pins::Pinout::arcs_of(part, &pin.group)
                        .iter()
                        .any(|x| x == &a.name || x.starts_with(&format!("{} (", a.name)))
                })
                .count();
            assert!(
                with_pins > 0,
                "{} arc {} has no pin",
                part.type_name,
                a.name
            );
        }
        // a clocked part has exactly its clock pins in the clock role
        if let Some(c) = d.clocked.iter().find(|c| {
            c.instance
                == d.instances
                    .iter()
                    .position(|x| x.reference == i.reference)
                    .unwrap()
        }) {
            assert!(
                p.pins
                    .iter()
                    .any(|pin| pin.group == c.pin && pin.role == PinRole::Clock),
                "{}: clock pin {} not in the clock role",
                part.type_name,
                c.pin
            );
        }
    }
}

#[test]
fn parts_command_shows_the_pins_with_their_arcs() {
    let run = |args: &[&str]| {
        let out = Command::new(env!("CARGO_BIN_EXE_slackmeter"))
            .args(args)
            .env("COLUMNS", "200")
            .output()
            .unwrap();
        assert!(
            out.status.success(),
            "{}",
            String::from_utf8_lossy(&out.stderr)
        );
        String::from_utf8(out.stdout).unwrap()
    };
    let text = run(&["parts", "74HC574"]);
    assert!(
        text.contains("pins (DIP-20) — TI SN74HC574 data sheet SCLS148F"),
        "{text}"
    );
    assert!(
        text.contains("    11  CLK   clock          CLK->Q, D->CLK (setup)"),
        "{text}"
    );
    assert!(text.contains("    10  GND   ground\n"), "{text}");
    // a vendor variant shows its generic type's pins; the generic shows them once
    assert_eq!(text.matches("pins (DIP-20)").count(), 1, "{text}");
    assert!(run(&["parts", "74HC574/ti-cd"]).contains("pins (DIP-20)"));
    let json: serde_json::Value =
        serde_json::from_str(&run(&["parts", "AT28C256-20", "--json"])).unwrap();
    let pins = json["pins"]["pins"].as_array().unwrap();
    assert_eq!(pins.len(), 28);
    assert_eq!(pins[26]["name"], "WE");
    assert_eq!(pins[26]["role"], "clock");
    assert_eq!(json["pins"]["status"], "seen");
    // a part without a pin table says nothing about pins
    assert!(!run(&["parts", "NE555"]).contains("pins ("));
    // a no-connection pin shows its role and no arc
    assert!(
        run(&["parts", "74HC30"]).contains("     9  NC    not connected\n"),
        "74HC30 pin 9"
    );
}

#[test]
fn the_listed_types_and_their_vendor_variants_have_pins() {
    let lib = Library::builtin();
    for &t in MAPPED {
        assert!(lib.part_index(t).is_some(), "{t} is not a library type");
        assert!(lib.pinout(t).is_some(), "{t} has no pinout");
    }
    // a vendor variant finds its generic type's pinout
    for p in &lib.parts {
        let base = p.type_name.split('/').next().unwrap();
        if MAPPED.contains(&base) {
            assert!(lib.pinout(&p.type_name).is_some(), "{}", p.type_name);
        }
    }
}

#[test]
fn every_pinout_numbers_each_pin_once_with_corner_power() {
    // DIP packages, pins counted from 1 down the first row (every sheet cited prints them so),
    // and the JEDEC corner supply of these logic and memory pinouts: ground on the last pin of
    // the first row, VCC on the last pin (each cited table shows it)
    let lib = Library::builtin();
    let tables = slackmeter::budget::library::pins::PINS_FILE
        .1
        .matches("[[pinout]]")
        .count();
    assert_eq!(lib.pinouts.len(), tables);
    for p in &lib.pinouts {
        let n = p.pins.len();
        assert_eq!(p.package, format!("DIP-{n}"), "{:?}", p.types);
        for (i, pin) in p.pins.iter().enumerate() {
            assert_eq!(pin.number as usize, i + 1, "{:?}", p.types);
        }
        assert_eq!(p.pins[n / 2 - 1].role, PinRole::Ground, "{:?}", p.types);
        assert_eq!(p.pins[n - 1].role, PinRole::Power, "{:?}", p.types);
        // one role per group
        for a in &p.pins {
            for b in p.pins.iter().filter(|b| b.group == a.group) {
                assert_eq!(a.role, b.role, "{:?} group {}", p.types, a.group);
            }
        }
    }
}

#[test]
fn the_pin_a_check_or_clock_limit_is_timed_against_is_in_the_clock_role() {
    // a setup or hold time is measured at the capturing edge of a clock, latch enable or write
    // strobe (the data sheets' timing diagrams), and pulse widths and fmax are limits of that pin
    let lib = Library::builtin();
    let mut checked = 0;
    for part in &lib.parts {
        let Some(p) = lib.pinout(&part.type_name) else {
            continue;
        };
        for a in &part.arcs {
            let at = match a.kind {
                ArcKind::Delay => continue,
                ArcKind::Setup | ArcKind::Hold => a.name.split("->").nth(1),
                _ => a.name.split("->").next(),
            }
            .map(str::trim)
            .unwrap();
            let pins: Vec<_> = p.pins.iter().filter(|x| x.group == at).collect();
            assert!(
                !pins.is_empty(),
                "{} {}: no pin {at}",
                part.type_name,
                a.name
            );
            for pin in pins {
                assert_eq!(
                    pin.role,
                    PinRole::Clock,
                    "{} {} ({}): pin {} {}",
                    part.type_name,
                    a.name,
                    a.kind.name(),
                    pin.number,
                    pin.name
                );
            }
            checked += 1;
        }
    }
    assert!(checked > 100, "{checked} arcs checked");
}

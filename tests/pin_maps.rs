//! Package pins of the library's parts against the data sheets' pin tables: every part the demo
//! machine uses has its pins, each pin's number and name as the cited sheet prints it, every arc
//! has its pins, and `slackmeter parts NAME` shows them.

use std::process::Command;

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
    assert!(!run(&["parts", "74HC00/nxp"]).contains("pins ("));
}

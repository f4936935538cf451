//! Netlist import speed: a 500-part netlist (250 registers and 250 bus transceivers in a ring,
//! every register on one clock), read and turned into a design. Run: `cargo bench --bench import`.

use std::collections::BTreeMap;

use slackmeter::budget::Library;
use slackmeter::diag::Source;
use slackmeter::import::{self, Options};

fn main() {
    divan::main();
}

/// The ring: register U(2i) (74HC574) → transceiver U(2i+1) (74HC245) → the next register.
fn ring(parts: usize) -> String {
    let mut s = String::from("(export (version \"E\")\n  (components\n");
    for i in 0..parts {
        let v = if i % 2 == 0 { "74HC574" } else { "74HC245" };
        s += &format!(
            "    (comp (ref \"U{i}\") (value \"{v}\") (footprint \"DIP-20\") (sheetpath (names \"/\") (tstamps \"/\")))\n"
        );
    }
    s += "  )\n  (nets\n";
    let mut code = 0;
    let mut net = |s: &mut String, name: String, nodes: &[(usize, u32)]| {
        code += 1;
        *s += &format!("    (net (code \"{code}\") (name \"{name}\")");
        for (r, p) in nodes {
            *s += &format!(" (node (ref \"U{r}\") (pin \"{p}\") (pintype \"passive\"))");
        }
        *s += ")\n";
    };
    let regs: Vec<(usize, u32)> = (0..parts).step_by(2).map(|i| (i, 11)).collect();
    net(&mut s, "/CLK".into(), &regs);
    let mut gnd: Vec<(usize, u32)> = Vec::new();
    let mut vcc: Vec<(usize, u32)> = Vec::new();
    for i in (0..parts).step_by(2) {
        let (reg, bus, next) = (i, i + 1, (i + 2) % parts);
        for b in 0..8u32 {
            // register Q (pins 19..12) → transceiver A (pins 2..9); B (18..11) → next D (2..9)
            net(&mut s, format!("/Q{i}_{b}"), &[(reg, 19 - b), (bus, 2 + b)]);
            net(
                &mut s,
                format!("/B{i}_{b}"),
                &[(bus, 18 - b), (next, 2 + b)],
            );
        }
        gnd.extend([(reg, 1), (reg, 10), (bus, 10), (bus, 19)]);
        vcc.extend([(reg, 20), (bus, 20), (bus, 1)]);
    }
    net(&mut s, "GND".into(), &gnd);
    net(&mut s, "+5V".into(), &vcc);
    s + "  )\n)\n"
}

#[divan::bench]
fn import_500_parts(b: divan::Bencher) {
    let lib = Library::builtin();
    let text = ring(500);
    let map = BTreeMap::new();
    b.bench(|| {
        let n = import::parse(&Source::new("ring.net", text.as_str())).unwrap();
        let o = Options {
            clock: "CLK",
            map: &map,
            name: "ring",
            source: "ring.net",
            sections: &[],
        };
        let done = import::import(&n, &lib, &o).unwrap();
        assert!(
            done.todos.is_empty(),
            "{:?}",
            &done.todos[..3.min(done.todos.len())]
        );
        done.design.len()
    });
}

//! Foxglove-8, the second invented example machine (docs/DEMO-MACHINE.md): its netlist
//! (`designs/foxglove-8.net`, written by `tests/fifty/netlist.rs`) imported and budgeted.

#[path = "fifty/netlist.rs"]
mod netlist;

use std::collections::BTreeMap;

use slackmeter::budget::Library;
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
    assert!(on_disk == text, "designs/foxglove-8.net differs from tests/fifty/netlist.rs: regenerate with SLACKMETER_BLESS=1");
}

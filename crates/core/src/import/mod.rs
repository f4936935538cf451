//! Import of a schematic netlist (KiCad's S-expression `.net` export) as a design file in the
//! compact syntax: `netlist` reads the file, `build` matches parts, follows the clock and writes
//! the design with a TODO for everything it cannot decide; `sections` reads the `--section`
//! rules. Pure: text in, text out.

mod build;
pub mod netlist;
pub mod sections;

pub use build::{Import, Options, import};
pub use netlist::{Component, Net, Netlist, Node, parse};
pub use sections::{SectionError, SectionRule};

/// The mapping file: component values the library does not know, each mapped to a library type
/// (`"SN74HC574N" = "74HC574"`), errors located with file:line:column.
pub fn read_map(
    src: &crate::diag::Source,
) -> Result<std::collections::BTreeMap<String, String>, Box<crate::diag::SourceError>> {
    toml::from_str(&src.text).map_err(|e| Box::new(src.toml_error(&e)))
}

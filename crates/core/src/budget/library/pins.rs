//! Package pins of the library's parts (`library/pins.toml`): each pin's number, data-sheet
//! name, the group its arcs call it by and its role, each pinout with its data sheet and status,
//! checked against the part's arcs when the library loads.

use std::collections::BTreeMap;

use serde::Deserialize;
use toml::Spanned;

use super::model::{ArcKind, Library, Part, Status};
pub use super::model::{Pin, PinRole, Pinout};
use crate::diag::{Source, SourceError};

/// The embedded pin file, by the name shown in diagnostics.
pub const PINS_FILE: (&str, &str) = ("builtin:pins.toml", include_str!("pins.toml"));

/// Words on the output side of an arc that are a state, not a pin ("OE->Z": to high
/// impedance; "WE->ready": the end of an internal write).
const STATES: [&str; 2] = ["Z", "ready"];

impl Pinout {
    /// The arcs of `part` a pin of `group` belongs to: those naming the group on either side
    /// ("D->CLK" for D and CLK), and the clock limits named by the group alone ("CLK").
    pub fn arcs_of(part: &Part, group: &str) -> Vec<String> {
        let mut out: Vec<String> = Vec::new();
        for a in &part.arcs {
            let named = a.name.split("->").any(|side| side.trim() == group);
            let label = match a.kind {
                ArcKind::Delay => a.name.clone(),
                k => format!("{} ({})", a.name, k.name()),
            };
            if named && !out.contains(&label) {
                out.push(label);
            }
        }
        out
    }
}

impl Library {
    /// The pinout of a part type: its own, or its generic type's for a vendor variant.
    pub fn pinout(&self, type_name: &str) -> Option<&Pinout> {
        let base = type_name.split('/').next().unwrap_or(type_name);
        self.pinouts
            .iter()
            .find(|p| p.types.iter().any(|t| t == type_name || t == base))
    }
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    pinout: Vec<RawPinout>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPinout {
    types: Vec<Spanned<String>>,
    package: Spanned<String>,
    source: String,
    status: Status,
    names: Spanned<Vec<String>>,
    groups: Vec<RawGroup>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawGroup {
    name: Spanned<String>,
    role: PinRole,
    pins: Spanned<Vec<u32>>,
}

/// Read the pin file and check every pinout against the parts it names.
pub fn load(src: &Source, lib: &Library) -> Result<Vec<Pinout>, Box<SourceError>> {
    let raw: RawFile = toml::from_str(&src.text).map_err(|e| Box::new(src.toml_error(&e)))?;
    let fail = |span: std::ops::Range<usize>, msg: String, help: &str| {
        src.fail(span, msg, "here", Some(help.into()))
    };
    let mut out = Vec::new();
    for p in raw.pinout {
        let count = pin_count(&p.package).ok_or_else(|| {
            fail(
                p.package.span(),
                format!("package \"{}\" is not DIP-N", p.package.get_ref()),
                "write the package as \"DIP-16\"",
            )
        })?;
        if p.names.get_ref().len() != count as usize {
            return Err(fail(
                p.names.span(),
                format!(
                    "{} names for a {}-pin package",
                    p.names.get_ref().len(),
                    count
                ),
                "name every pin, pin 1 first",
            ));
        }
        let mut group_of: BTreeMap<u32, (String, PinRole)> = BTreeMap::new();
        for g in &p.groups {
            for &n in g.pins.get_ref() {
                if n == 0 || n > count {
                    return Err(fail(
                        g.pins.span(),
                        format!("pin {n} is not on a {count}-pin package"),
                        "pins are numbered from 1",
                    ));
                }
                if let Some((other, _)) = group_of.insert(n, (g.name.get_ref().clone(), g.role)) {
                    return Err(fail(
                        g.pins.span(),
                        format!("pin {n} is in group {other} and {}", g.name.get_ref()),
                        "put each pin in one group",
                    ));
                }
            }
        }
        if let Some(n) = (1..=count).find(|n| !group_of.contains_key(n)) {
            return Err(fail(
                p.names.span(),
                format!(
                    "pin {n} ({}) is in no group",
                    p.names.get_ref()[n as usize - 1]
                ),
                "add it to a group (power, ground or its arc's pin)",
            ));
        }
        let groups: Vec<&str> = p.groups.iter().map(|g| g.name.get_ref().as_str()).collect();
        for t in &p.types {
            let Some(i) = lib.part_index(t.get_ref()) else {
                return Err(fail(
                    t.span(),
                    format!("no part type \"{}\" in the library", t.get_ref()),
                    "name a type `slackmeter parts` lists",
                ));
            };
            check_arcs(&lib.parts[i], &groups, t, &fail)?;
            for &v in &lib.parts[i].variants {
                check_arcs(&lib.parts[v], &groups, t, &fail)?;
            }
        }
        out.push(Pinout {
            types: p.types.iter().map(|t| t.get_ref().clone()).collect(),
            package: p.package.get_ref().clone(),
            source: p.source,
            status: p.status,
            pins: p
                .names
                .get_ref()
                .iter()
                .enumerate()
                .map(|(i, name)| {
                    let number = i as u32 + 1;
                    let (group, role) = group_of[&number].clone();
                    Pin {
                        number,
                        name: name.clone(),
                        group,
                        role,
                    }
                })
                .collect(),
        });
    }
    Ok(out)
}

type Fail<'f> = &'f dyn Fn(std::ops::Range<usize>, String, &str) -> Box<SourceError>;

/// Every pin an arc of `part` names is a group of the pinout.
fn check_arcs(
    part: &Part,
    groups: &[&str],
    at: &Spanned<String>,
    fail: Fail,
) -> Result<(), Box<SourceError>> {
    for a in &part.arcs {
        for (k, side) in a.name.split("->").map(str::trim).enumerate() {
            let state = k > 0 && STATES.contains(&side);
            if !state && !groups.contains(&side) {
                return Err(fail(
                    at.span(),
                    format!(
                        "arc {} of {} names pin {side}, which no group of this pinout is",
                        a.name, part.type_name
                    ),
                    "name the group as the part's arcs do",
                ));
            }
        }
    }
    Ok(())
}

/// The pin count of "DIP-N".
fn pin_count(package: &Spanned<String>) -> Option<u32> {
    let n: u32 = package.get_ref().strip_prefix("DIP-")?.parse().ok()?;
    (n >= 4 && n.is_multiple_of(2)).then_some(n)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn load_text(text: &str) -> Result<Vec<Pinout>, Box<SourceError>> {
        load(&Source::new("pins.toml", text), &Library::builtin())
    }

    const GOOD: &str = r#"
[[pinout]]
types = ["74HC04"]
package = "DIP-14"
source = "test"
status = "seen"
names = ["1A", "1Y", "2A", "2Y", "3A", "3Y", "GND", "4Y", "4A", "5Y", "5A", "6Y", "6A", "VCC"]
groups = [
  { name = "A", role = "input", pins = [1, 3, 5, 9, 11, 13] },
  { name = "Y", role = "output", pins = [2, 4, 6, 8, 10, 12] },
  { name = "GND", role = "ground", pins = [7] },
  { name = "VCC", role = "power", pins = [14] },
]
"#;

    #[test]
    fn a_table_is_checked_against_its_package_and_the_parts_arcs() {
        assert_eq!(load_text(GOOD).unwrap()[0].pins[6].name, "GND");
        let cases = [
            (GOOD.replace("DIP-14", "SOIC-14"), "is not DIP-N"),
            (
                GOOD.replace("\"6A\", ", ""),
                "13 names for a 14-pin package",
            ),
            (
                GOOD.replace("[14]", "[15]"),
                "pin 15 is not on a 14-pin package",
            ),
            (GOOD.replace("[7]", "[7, 1]"), "pin 1 is in group A and GND"),
            (GOOD.replace("[14]", "[]"), "pin 14 (VCC) is in no group"),
            (
                GOOD.replace("\"74HC04\"", "\"74HC9999\""),
                "no part type \"74HC9999\"",
            ),
            (
                GOOD.replace("name = \"Y\"", "name = \"Q\""),
                "arc A->Y of 74HC04 names pin Y",
            ),
        ];
        for (text, want) in cases {
            let e = load_text(&text).unwrap_err();
            assert!(e.message.contains(want), "{} lacks {want}", e.message);
            assert!(e.help.is_some());
        }
    }

    #[test]
    fn a_no_connection_pin_is_in_a_group_of_its_own_and_belongs_to_no_arc() {
        // the Nexperia 74HC30 Table 2 lists pins 9, 10 and 13 as "n.c." (not connected)
        let text = r#"
[[pinout]]
types = ["74HC30"]
package = "DIP-14"
source = "test"
status = "seen"
names = ["A", "B", "C", "D", "E", "F", "GND", "Y", "NC", "NC", "G", "H", "NC", "VCC"]
groups = [
  { name = "A", role = "input", pins = [1, 2, 3, 4, 5, 6, 11, 12] },
  { name = "Y", role = "output", pins = [8] },
  { name = "NC", role = "nc", pins = [9, 10, 13] },
  { name = "GND", role = "ground", pins = [7] },
  { name = "VCC", role = "power", pins = [14] },
]
"#;
        let p = &load_text(text).unwrap()[0];
        let lib = Library::builtin();
        let part = &lib.parts[lib.part_index("74HC30").unwrap()];
        for n in [9, 10, 13] {
            assert_eq!(p.pins[n - 1].role, PinRole::NotConnected);
            assert_eq!(p.pins[n - 1].role.word(), "not connected");
            assert!(Pinout::arcs_of(part, &p.pins[n - 1].group).is_empty());
        }
        // leaving the n.c. pins out of every group is still an error
        let e = load_text(&text.replace("[9, 10, 13]", "[9, 10]")).unwrap_err();
        assert!(
            e.message.contains("pin 13 (NC) is in no group"),
            "{}",
            e.message
        );
    }
}

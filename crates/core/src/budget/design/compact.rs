//! The compact forms of a design file as serde reads them: register groups, buses and includes
//! (instance groups are `refs = [...]` in `[[part]]`, chains are strings). `expand.rs` turns
//! them into the long-form entries of `raw.rs`. `[[microstep]]` and a driver's `when` say which
//! drivers are on together, for `check`.

use std::collections::BTreeMap;

use serde::Deserialize;
use toml::Spanned;

use super::model::Edge;

/// `[[register]]`: parts clocked by one master edge; each member launches its `q` and captures
/// its `d` (either may be left out).
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawRegisters {
    pub edge: Edge,
    /// Declares the members as parts of this type (else they are declared in `[[part]]`).
    #[serde(rename = "type")]
    pub type_name: Option<Spanned<String>>,
    pub section: Option<Spanned<String>>,
    /// The clock-to-output arc of every member (default "CLK->Q").
    pub arc: Option<Spanned<String>>,
    /// The setup/hold arcs of every member (default "D->CLK").
    pub check: Option<Spanned<String>>,
    #[serde(default)]
    pub clock_via: Vec<Spanned<ViaEntry>>,
    pub members: Vec<RawMember>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

/// One member of a register group.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMember {
    #[serde(rename = "ref")]
    pub reference: Spanned<String>,
    pub name: Option<String>,
    /// The signal(s) its output drives (a launch each).
    pub q: Option<Spanned<Names>>,
    /// The signal(s) its input captures (a capture each).
    pub d: Option<Spanned<Names>>,
    pub arc: Option<Spanned<String>>,
    pub check: Option<Spanned<String>>,
    #[serde(rename = "type")]
    pub type_name: Option<Spanned<String>>,
    pub section: Option<Spanned<String>>,
    pub load: Option<Spanned<String>>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

/// `[[bus]]`: one bus signal, the drivers that put data on it and the inputs that capture it.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawBus {
    pub signal: Spanned<String>,
    /// The drivers' data arc (e.g. "A->B"), unless a driver names its own.
    pub data_arc: Option<Spanned<String>>,
    /// The drivers' enable arc (e.g. "OE->B"), unless a driver names its own.
    pub enable_arc: Option<Spanned<String>>,
    #[serde(default)]
    pub drivers: Vec<RawDriver>,
    #[serde(default)]
    pub sinks: Vec<RawSink>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

/// A bus driver: a part, the signal(s) it passes onto the bus and the control(s) enabling it.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawDriver {
    pub part: Spanned<String>,
    pub from: Spanned<Names>,
    pub enable: Option<Spanned<Names>>,
    pub data_arc: Option<Spanned<String>>,
    pub enable_arc: Option<Spanned<String>>,
    /// The control bit of the microcode that turns this driver on (see `[[microstep]]`); only
    /// `check` reads it, to find two drivers on at once.
    pub when: Option<Spanned<String>>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

/// `[[microstep]]`: one step of the machine's control word, the control bits it asserts. Only
/// `check` reads it: a bus whose drivers' `when` bits two of these name is driven twice.
#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMicrostep {
    pub name: Spanned<String>,
    #[serde(default)]
    pub on: Vec<Spanned<String>>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

/// An input that captures the bus: a part's check, or fixed setup/hold times.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSink {
    pub name: Option<String>,
    pub edge: Spanned<Edge>,
    pub part: Option<Spanned<String>>,
    pub check: Option<Spanned<String>>,
    pub setup: Option<Spanned<String>>,
    pub hold: Option<Spanned<String>>,
    #[serde(default)]
    pub clock_via: Vec<Spanned<ViaEntry>>,
}

/// `[[include]]`: another design file's parts and timing, its names prefixed.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawInclude {
    /// Path, relative to the including file's folder.
    pub file: Spanned<String>,
    /// Put before every part reference and signal name of the included file …
    pub prefix: Option<Spanned<String>>,
    /// … except these, which name the including design's signal or part instead.
    #[serde(default)]
    pub connect: BTreeMap<String, Spanned<String>>,
    /// The section of the included parts that name none.
    pub section: Option<Spanned<String>>,
}

/// One name or a list of names (`from = "a_q"` or `from = ["alu_lo", "alu_hi"]`).
#[derive(Clone)]
pub(super) enum Names {
    One(String),
    Many(Vec<Spanned<String>>),
}

impl Names {
    /// The names, each with its span (a single name takes the span of the whole value).
    pub fn spanned(s: &Spanned<Names>) -> Vec<Spanned<String>> {
        match s.get_ref() {
            Names::One(n) => vec![Spanned::new(s.span(), n.clone())],
            Names::Many(v) => v.clone(),
        }
    }
}

impl<'de> Deserialize<'de> for Names {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> serde::de::Visitor<'de> for V {
            type Value = Names;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a signal name or a list of them, e.g. \"a_q\" or [\"lo\", \"hi\"]")
            }
            fn visit_str<E: serde::de::Error>(self, s: &str) -> Result<Names, E> {
                Ok(Names::One(s.to_string()))
            }
            fn visit_seq<S: serde::de::SeqAccess<'de>>(self, s: S) -> Result<Names, S::Error> {
                Vec::<Spanned<String>>::deserialize(serde::de::value::SeqAccessDeserializer::new(s))
                    .map(Names::Many)
            }
        }
        d.deserialize_any(V)
    }
}

/// A clock buffer written as a table.
#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawVia {
    pub part: Spanned<String>,
    pub arc: Spanned<String>,
}

/// A clock buffer on a launch or capture clock: `{ part = "U30", arc = "A->Y" }` or the short
/// string `"U30 A->Y"` (turned into the table by `expand.rs`, which knows its span).
#[derive(Clone)]
pub(super) enum ViaEntry {
    Short(String),
    Table(RawVia),
}

impl<'de> Deserialize<'de> for ViaEntry {
    fn deserialize<D: serde::Deserializer<'de>>(d: D) -> Result<Self, D::Error> {
        struct V;
        impl<'de> serde::de::Visitor<'de> for V {
            type Value = ViaEntry;
            fn expecting(&self, f: &mut std::fmt::Formatter) -> std::fmt::Result {
                f.write_str("a clock buffer: \"PART ARC\" (e.g. \"U30 A->Y\") or { part = \"U30\", arc = \"A->Y\" }")
            }
            fn visit_str<E: serde::de::Error>(self, s: &str) -> Result<ViaEntry, E> {
                Ok(ViaEntry::Short(s.to_string()))
            }
            fn visit_map<M: serde::de::MapAccess<'de>>(self, m: M) -> Result<ViaEntry, M::Error> {
                RawVia::deserialize(serde::de::value::MapAccessDeserializer::new(m))
                    .map(ViaEntry::Table)
            }
        }
        d.deserialize_any(V)
    }
}

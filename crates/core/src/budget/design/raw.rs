//! The design file format as read by serde, with spans for diagnostics. The compact forms
//! (instance groups, register groups, buses, chains, includes) are in `compact.rs`; `expand.rs`
//! turns a file of either form into the long-form entries below.

use serde::Deserialize;
use toml::Spanned;

pub(super) use super::compact::{RawVia, ViaEntry};
use super::model::Edge;
use crate::budget::derate::Corner;
use crate::budget::library::model::ArcKind;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawDesign {
    pub design: RawMeta,
    pub operating: Option<Spanned<RawOperating>>,
    pub clock: Option<Spanned<RawClock>>,
    #[serde(default)]
    pub section: Vec<RawSection>,
    #[serde(default)]
    pub part: Vec<RawPart>,
    #[serde(default)]
    pub register: Vec<super::compact::RawRegisters>,
    #[serde(default)]
    pub bus: Vec<super::compact::RawBus>,
    #[serde(default)]
    pub microstep: Vec<super::compact::RawMicrostep>,
    #[serde(default)]
    pub chains: Vec<Spanned<String>>,
    #[serde(default)]
    pub include: Vec<super::compact::RawInclude>,
    #[serde(default)]
    pub launch: Vec<RawLaunch>,
    #[serde(default)]
    pub arc: Vec<RawArc>,
    #[serde(default)]
    pub capture: Vec<RawCapture>,
    #[serde(default, rename = "override")]
    pub overrides: Vec<RawOverride>,
    /// The supply wiring tables, read and checked by the power budget (`power::Wiring`).
    pub supply: Option<Spanned<toml::Value>>,
    #[serde(default)]
    pub feed: Vec<Spanned<toml::Value>>,
    #[serde(default)]
    pub led: Vec<Spanned<toml::Value>>,
    #[serde(default)]
    pub load: Vec<Spanned<toml::Value>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawMeta {
    pub name: String,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOperating {
    pub vcc: Option<Spanned<String>>,
    pub temp: Option<Spanned<toml::Value>>,
    pub corner: Option<Corner>,
    pub common_clock_credit: Option<bool>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawClock {
    pub name: Option<String>,
    pub freq: Option<Spanned<String>>,
    pub duty: Option<Spanned<toml::Value>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawSection {
    pub name: Spanned<String>,
    pub rail: Option<String>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawPart {
    /// One reference designator …
    #[serde(rename = "ref")]
    pub reference: Option<Spanned<String>>,
    /// … or several of the same type and settings (an instance group).
    pub refs: Option<Spanned<Vec<Spanned<String>>>>,
    #[serde(rename = "type")]
    pub type_name: Spanned<String>,
    pub section: Option<Spanned<String>>,
    pub load: Option<Spanned<String>>,
    #[allow(dead_code)]
    pub notes: Option<String>,
}

/// One part instance, declared by a `[[part]]` (one of its `refs`) or a register group.
#[derive(Clone)]
pub(super) struct PartDecl {
    pub reference: Spanned<String>,
    pub type_name: Spanned<String>,
    pub section: Option<Spanned<String>>,
    pub load: Option<Spanned<String>>,
}

#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawLaunch {
    pub name: Option<String>,
    pub edge: Edge,
    pub part: Spanned<String>,
    pub arc: Spanned<String>,
    pub to: Spanned<String>,
    #[serde(default)]
    pub clock_via: Vec<Spanned<ViaEntry>>,
}

#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawFixed {
    pub min: Option<Spanned<String>>,
    pub typ: Option<Spanned<String>>,
    pub max: Spanned<String>,
}

#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawArc {
    pub from: Spanned<String>,
    pub to: Spanned<String>,
    pub part: Option<Spanned<String>>,
    pub arc: Option<Spanned<String>>,
    pub delay: Option<Spanned<RawFixed>>,
    pub name: Option<String>,
}

#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawCapture {
    pub name: Option<String>,
    pub signal: Spanned<String>,
    pub edge: Edge,
    pub part: Option<Spanned<String>>,
    pub check: Option<Spanned<String>>,
    pub setup: Option<Spanned<String>>,
    pub hold: Option<Spanned<String>>,
    #[serde(default)]
    pub clock_via: Vec<Spanned<ViaEntry>>,
}

#[derive(Clone, Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawOverride {
    pub part: Spanned<String>,
    pub arc: Spanned<String>,
    pub kind: Option<ArcKind>,
    pub min: Option<Spanned<String>>,
    pub typ: Option<Spanned<String>>,
    pub max: Option<Spanned<String>>,
    pub scale: Option<Spanned<f64>>,
}

//! The library file format as read by serde, with spans for diagnostics.

use std::collections::BTreeMap;

use serde::Deserialize;
use toml::Spanned;

use super::model::{ActiveEdge, ArcKind, DeratingKind, Status};

/// One library file: families and parts.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawFile {
    #[serde(default)]
    pub family: Vec<RawFamily>,
    #[serde(default)]
    pub part: Vec<RawPart>,
}

/// A `[[family]]` entry.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawFamily {
    pub name: Spanned<String>,
    pub vcc_min_v: f64,
    pub vcc_max_v: f64,
    pub vcc_nominal_v: f64,
    pub rail_limit_v: f64,
    pub temp_min_c: f64,
    pub temp_max_c: f64,
    pub derating: DeratingKind,
    pub shape_from: Option<Spanned<String>>,
    /// ns per pF beyond a row's own load: one number, or one per `load_vcc_v` column; absent
    /// when the family's data sheets give no two-load table (load is then not modelled).
    pub load_ns_per_pf: Option<Spanned<RawSlope>>,
    pub load_vcc_v: Option<Vec<f64>>,
    #[serde(default)]
    pub load_source: String,
    pub source: String,
}

/// A load slope: one value for every supply, or one per column.
#[derive(Deserialize)]
#[serde(untagged)]
pub(super) enum RawSlope {
    One(f64),
    PerColumn(Vec<f64>),
}

/// A `[[part]]` entry.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawPart {
    #[serde(rename = "type")]
    pub type_name: Spanned<String>,
    pub family: Spanned<String>,
    pub function: String,
    pub source: String,
    pub status: Status,
    pub load_pf: f64,
    pub vcc_v: Spanned<Vec<f64>>,
    pub temp_min_c: Option<f64>,
    pub temp_max_c: Option<f64>,
    pub clock_edge: Option<ActiveEdge>,
    #[serde(default)]
    pub arc: Vec<RawArc>,
}

/// Rows keyed by temperature column: "25" (at 25 °C), "85" (from the part's lowest rated
/// temperature to 85 °C), or an explicit range "-55..25".
pub(super) type RawColumns = BTreeMap<String, Spanned<Vec<f64>>>;

/// A `[[part.arc]]` entry.
#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
pub(super) struct RawArc {
    pub name: Spanned<String>,
    pub kind: Spanned<ArcKind>,
    pub source: Option<String>,
    pub status: Option<Status>,
    pub vcc_v: Option<Spanned<Vec<f64>>>,
    pub typ_ns: Option<Spanned<Vec<f64>>>,
    pub typ_vcc_v: Option<Vec<f64>>,
    pub typ_load_pf: Option<f64>,
    pub typ_status: Option<Status>,
    pub max_ns: Option<Spanned<RawColumns>>,
    pub limit_ns: Option<Spanned<RawColumns>>,
    pub min_ns: Option<Spanned<RawColumns>>,
    /// Supply columns of `min_ns` when they differ (a minimum given for "3.3 V ± 0.3 V" holds
    /// up to 3.6 V).
    pub min_vcc_v: Option<Spanned<Vec<f64>>>,
    /// Guaranteed (minimum) f_max of an `fmax` arc, MHz.
    pub limit_mhz: Option<Spanned<RawColumns>>,
    /// Typical f_max of an `fmax` arc, MHz.
    pub typ_mhz: Option<Spanned<Vec<f64>>>,
}

//! One part's data-sheet rows as published (every column, its source and status), for
//! `slackmeter parts NAME` and its JSON.

use serde::Serialize;

use super::model::{ActiveEdge, ArcKind, Column, Library, Series};

/// A part as its data sheet gives it.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct PartSheet {
    /// Type name.
    #[serde(rename = "type")]
    pub type_name: String,
    /// Family.
    pub family: String,
    /// What it is.
    pub function: String,
    /// Data sheet.
    pub source: String,
    /// Seen, secondary or from memory.
    pub status: String,
    /// Rated temperature range, °C.
    pub temp_min_c: f64,
    /// See `temp_min_c`.
    pub temp_max_c: f64,
    /// "rising" or "falling".
    pub clock_edge: String,
    /// Whether the part captures anything on that edge (it has setup, hold, pulse-width or
    /// f_max arcs); gates and read-only memories do not.
    pub clocked: bool,
    /// For a generic part: the vendor variants it is the worst of.
    pub variants: Vec<String>,
    /// Its arcs.
    pub arcs: Vec<ArcSheet>,
    /// Its package pins, when the library has its pinout.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub pins: Option<PinSheet>,
    /// For a generic part: each variant's own sheet.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub variant_sheets: Vec<PartSheet>,
}

/// A part's package pins, each with the arcs it belongs to.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct PinSheet {
    /// Package, e.g. "DIP-20".
    pub package: String,
    /// The data sheet the pin table was read from.
    pub source: String,
    /// Seen, secondary or from memory.
    pub status: String,
    /// The pins, pin 1 first.
    pub pins: Vec<PinRow>,
}

/// One pin.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct PinRow {
    /// Pin number.
    pub number: u32,
    /// Data-sheet name.
    pub name: String,
    /// The pin name its arcs use.
    pub group: String,
    /// input, clock, enable, control, output, bidirectional, power or ground.
    pub role: String,
    /// The part's arcs this pin belongs to.
    pub arcs: Vec<String>,
}

fn pin_sheet(lib: &Library, p: &super::model::Part) -> Option<PinSheet> {
    let pinout = lib.pinout(&p.type_name)?;
    Some(PinSheet {
        package: pinout.package.clone(),
        source: pinout.source.clone(),
        status: pinout.status.words().to_string(),
        pins: pinout
            .pins
            .iter()
            .map(|pin| PinRow {
                number: pin.number,
                name: pin.name.clone(),
                group: pin.group.clone(),
                role: pin.role.word().to_string(),
                arcs: super::pins::Pinout::arcs_of(p, &pin.group),
            })
            .collect(),
    })
}

/// One arc with its rows.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct ArcSheet {
    /// Arc name.
    pub name: String,
    /// Kind, as in library files.
    pub kind: String,
    /// Document and table.
    pub source: String,
    /// Seen, secondary or from memory.
    pub status: String,
    /// Guaranteed, typical and minimum rows.
    pub rows: Vec<RowSheet>,
}

/// One data-sheet row: a value per supply column.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct RowSheet {
    /// "max", "limit", "typ" or "min".
    pub what: String,
    /// The temperature column, e.g. "25 °C" or "−40…85 °C".
    pub temp: String,
    /// Supply columns, V.
    pub vcc_v: Vec<f64>,
    /// Values as published.
    pub values: Vec<f64>,
    /// "ns" or "MHz".
    pub unit: String,
    /// The load the row is given at, pF.
    pub load_pf: f64,
}

fn row(what: &str, temp: String, s: &Series, mhz: bool) -> RowSheet {
    let values = if mhz {
        // held as periods; shown as published, to 0.01 MHz
        s.ns.iter()
            .map(|t| (100_000.0 / t).round() / 100.0)
            .collect()
    } else {
        s.ns.clone()
    };
    RowSheet {
        what: what.to_string(),
        temp,
        vcc_v: s.vcc_v.clone(),
        values,
        unit: if mhz { "MHz" } else { "ns" }.to_string(),
        load_pf: s.load_pf,
    }
}

fn temp_words(c: &Column) -> String {
    if (c.temp_lo_c - c.temp_c).abs() < 1e-9 {
        format!("{} °C", c.temp_c)
    } else {
        format!("{}…{} °C", c.temp_lo_c, c.temp_c)
    }
}

/// The sheet of part `index`.
pub fn sheet(lib: &Library, index: usize) -> PartSheet {
    let p = &lib.parts[index];
    let arcs = p
        .arcs
        .iter()
        .map(|a| {
            let mhz = a.kind == ArcKind::Fmax;
            let what = match a.kind {
                ArcKind::Delay => "max",
                _ => "limit",
            };
            let mut rows: Vec<RowSheet> = a
                .worst
                .iter()
                .map(|c| row(what, temp_words(c), &c.series, mhz))
                .collect();
            if let Some(t) = &a.typ {
                rows.push(row("typ", "25 °C".into(), t, mhz));
            }
            rows.extend(
                a.min
                    .iter()
                    .map(|c| row("min", temp_words(c), &c.series, false)),
            );
            ArcSheet {
                name: a.name.clone(),
                kind: a.kind.name().to_string(),
                source: a.source.clone(),
                status: match &a.typ {
                    Some(_) if a.typ_status != a.status => {
                        format!("{}; typical {}", a.status.words(), a.typ_status.words())
                    }
                    _ => a.status.words().to_string(),
                },
                rows,
            }
        })
        .collect();
    PartSheet {
        type_name: p.type_name.clone(),
        family: lib.families[p.family].name.clone(),
        function: p.function.clone(),
        source: p.source.clone(),
        status: p.status.words().to_string(),
        temp_min_c: p.temp_min_c,
        temp_max_c: p.temp_max_c,
        clock_edge: match p.clock_edge {
            ActiveEdge::Rise => "rising",
            ActiveEdge::Fall => "falling",
        }
        .to_string(),
        clocked: p.arcs.iter().any(|a| a.kind != ArcKind::Delay),
        variants: p
            .variants
            .iter()
            .map(|&v| lib.parts[v].type_name.clone())
            .collect(),
        arcs,
        pins: pin_sheet(lib, p),
        // the variants share the generic type's pins: shown once, with it
        variant_sheets: p
            .variants
            .iter()
            .map(|&v| PartSheet {
                pins: None,
                ..sheet(lib, v)
            })
            .collect(),
    }
}

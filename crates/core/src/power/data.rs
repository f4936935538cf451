//! The parts' supply data (the library file `supply.toml`): per family defaults and per part
//! values, each with its source and status, checked with file:line:column when read.

use std::collections::BTreeMap;
use std::ops::Range;

use serde::Deserialize;
use toml::Spanned;

use crate::budget::library::{Library, Part, Status};
use crate::diag::{Source, SourceError};

/// The embedded supply data file, by the name shown in diagnostics.
pub const BUILTIN_SUPPLY: (&str, &str) = (
    "builtin:supply.toml",
    include_str!("../budget/library/supply.toml"),
);

/// How a part draws current.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DrawKind {
    /// CMOS logic: quiescent current plus Cpd·VCC·f.
    Cmos,
    /// Bipolar logic (LS): package current with outputs high / low, not depending on the clock.
    Ttl,
    /// A memory: active and standby current.
    Memory,
}

/// A quiescent-current table by temperature column (upper end of each column, °C → µA).
#[derive(Clone, Debug, PartialEq)]
pub struct IccColumns(pub Vec<(f64, f64)>);

impl IccColumns {
    /// The column covering `temp_c` (the first whose upper end is at or above it), else the
    /// widest; the flag says the temperature is beyond every column.
    pub fn at(&self, temp_c: f64) -> Option<(f64, bool)> {
        let hit = self.0.iter().find(|(t, _)| temp_c <= *t + 1e-9);
        match hit {
            Some(&(_, ua)) => Some((ua, false)),
            None => self.0.last().map(|&(_, ua)| (ua, true)),
        }
    }
}

/// One part's supply data, with family defaults filled in.
#[derive(Clone, Debug, PartialEq)]
pub struct Draw {
    /// How it draws current.
    pub kind: DrawKind,
    /// Power-dissipation capacitance per unit (CMOS).
    pub cpd_pf: f64,
    /// Units the Cpd is counted for (gates, buffers, flip-flops).
    pub units: u32,
    /// Outputs that drive a load.
    pub outputs: u32,
    /// Quiescent current by temperature column (CMOS).
    pub icc_ua: IccColumns,
    /// Extra current with every input at TTL levels (HCT).
    pub delta_icc_ua: f64,
    /// Package current, all outputs high (TTL).
    pub icch_ma: f64,
    /// Package current, all outputs low (TTL).
    pub iccl_ma: f64,
    /// Active current (memory).
    pub active_ma: f64,
    /// Standby current (memory).
    pub standby_ma: f64,
    /// Where the values come from.
    pub source: String,
    /// How sure we are.
    pub status: Status,
    /// True when no [[part]] entry matched and the family's defaults stand for the part.
    pub family_default: bool,
}

/// The supply data of the library: family defaults and per-part entries.
#[derive(Clone, Debug, Default)]
pub struct SupplyData {
    families: BTreeMap<String, Draw>,
    parts: Vec<(String, Draw)>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    #[serde(default)]
    family: Vec<Spanned<RawEntry>>,
    #[serde(default)]
    part: Vec<Spanned<RawEntry>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawEntry {
    name: Option<Spanned<String>>,
    #[serde(rename = "type")]
    type_name: Option<Spanned<String>>,
    kind: DrawKind,
    cpd_pf: Option<Spanned<f64>>,
    units: Option<Spanned<i64>>,
    outputs: Option<Spanned<i64>>,
    icc_ua: Option<Spanned<BTreeMap<String, Spanned<f64>>>>,
    delta_icc_ua: Option<Spanned<f64>>,
    icch_ma: Option<Spanned<f64>>,
    iccl_ma: Option<Spanned<f64>>,
    active_ma: Option<Spanned<f64>>,
    standby_ma: Option<Spanned<f64>>,
    source: String,
    status: Status,
}

type Res<T> = Result<T, Box<SourceError>>;

impl SupplyData {
    /// The built-in supply data.
    pub fn builtin() -> SupplyData {
        SupplyData::parse(&Source::new(BUILTIN_SUPPLY.0, BUILTIN_SUPPLY.1))
            .expect("built-in supply data is valid (tested)")
    }

    /// Read a supply data file; every value is checked (finite, not negative) at its location.
    pub fn parse(src: &Source) -> Res<SupplyData> {
        let raw: RawFile = toml::from_str(&src.text).map_err(|e| Box::new(src.toml_error(&e)))?;
        let mut out = SupplyData::default();
        for f in &raw.family {
            let Some(name) = &f.get_ref().name else {
                return Err(src.fail(
                    f.span(),
                    "a [[family]] needs a name",
                    "this table",
                    Some("add name = \"74HC\" (a family of the part library)".into()),
                ));
            };
            let d = entry(src, f.get_ref())?;
            out.families.insert(name.get_ref().clone(), d);
        }
        for p in &raw.part {
            let Some(t) = &p.get_ref().type_name else {
                return Err(src.fail(
                    p.span(),
                    "a [[part]] needs a type",
                    "this table",
                    Some("add type = \"74HC245\" (a type of the part library)".into()),
                ));
            };
            out.parts
                .push((t.get_ref().clone(), entry(src, p.get_ref())?));
        }
        Ok(out)
    }

    /// The supply data of a library part: its own entry over its family's defaults; None when
    /// neither exists.
    pub fn of(&self, lib: &Library, part: &Part) -> Option<Draw> {
        let family = lib.families.get(part.family).map(|f| f.name.as_str())?;
        let base = part.type_name.split('/').next().unwrap_or(&part.type_name);
        let own = self.parts.iter().find(|(t, _)| {
            base == t
                || base
                    .strip_prefix(t.as_str())
                    .is_some_and(|rest| rest.starts_with('-'))
        });
        let fam = self.families.get(family);
        match (own, fam) {
            (Some((_, d)), Some(f)) => Some(fill(d, f)),
            (Some((_, d)), None) => Some(d.clone()),
            (None, Some(f)) => Some(Draw {
                family_default: true,
                ..f.clone()
            }),
            (None, None) => None,
        }
    }
}

/// Raw entries keep 0 / empty for what they leave out; a part's entry takes the family's value
/// for each field it leaves out.
fn fill(d: &Draw, f: &Draw) -> Draw {
    let pick = |a: f64, b: f64| if a > 0.0 { a } else { b };
    Draw {
        kind: d.kind,
        cpd_pf: pick(d.cpd_pf, f.cpd_pf),
        units: if d.units > 0 { d.units } else { f.units },
        outputs: if d.outputs > 0 { d.outputs } else { f.outputs },
        icc_ua: if d.icc_ua.0.is_empty() {
            f.icc_ua.clone()
        } else {
            d.icc_ua.clone()
        },
        delta_icc_ua: pick(d.delta_icc_ua, f.delta_icc_ua),
        icch_ma: pick(d.icch_ma, f.icch_ma),
        iccl_ma: pick(d.iccl_ma, f.iccl_ma),
        active_ma: pick(d.active_ma, f.active_ma),
        standby_ma: pick(d.standby_ma, f.standby_ma),
        source: d.source.clone(),
        status: d.status,
        family_default: false,
    }
}

fn bad(src: &Source, span: Range<usize>, what: &str) -> Box<SourceError> {
    src.fail(
        span,
        format!("{what} must be a finite number ≥ 0"),
        "here",
        Some("supply values are plain numbers in the unit the key names (_pf, _ua, _ma)".into()),
    )
}

fn value(src: &Source, v: &Option<Spanned<f64>>, what: &str) -> Res<f64> {
    match v {
        Some(s) if s.get_ref().is_finite() && *s.get_ref() >= 0.0 => Ok(*s.get_ref()),
        Some(s) => Err(bad(src, s.span(), what)),
        None => Ok(0.0),
    }
}

fn count(src: &Source, v: &Option<Spanned<i64>>, what: &str) -> Res<u32> {
    match v {
        Some(s) => u32::try_from(*s.get_ref()).map_err(|_| bad(src, s.span(), what)),
        None => Ok(0),
    }
}

fn entry(src: &Source, e: &RawEntry) -> Res<Draw> {
    let mut cols = Vec::new();
    if let Some(t) = &e.icc_ua {
        for (k, v) in t.get_ref() {
            let temp: f64 = k.trim().parse().map_err(|_| {
                src.fail(
                    t.span(),
                    format!("temperature column \"{k}\" is not a number of °C"),
                    "in this table",
                    Some("write columns as 25 = …, 85 = …, 125 = …".into()),
                )
            })?;
            let ua = *v.get_ref();
            if !ua.is_finite() || ua < 0.0 {
                return Err(bad(src, v.span(), "icc_ua"));
            }
            cols.push((temp, ua));
        }
        cols.sort_by(|a, b| a.0.total_cmp(&b.0));
    }
    Ok(Draw {
        kind: e.kind,
        cpd_pf: value(src, &e.cpd_pf, "cpd_pf")?,
        units: count(src, &e.units, "units")?,
        outputs: count(src, &e.outputs, "outputs")?,
        icc_ua: IccColumns(cols),
        delta_icc_ua: value(src, &e.delta_icc_ua, "delta_icc_ua")?,
        icch_ma: value(src, &e.icch_ma, "icch_ma")?,
        iccl_ma: value(src, &e.iccl_ma, "iccl_ma")?,
        active_ma: value(src, &e.active_ma, "active_ma")?,
        standby_ma: value(src, &e.standby_ma, "standby_ma")?,
        source: e.source.clone(),
        status: e.status,
        family_default: false,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_supply_data_covers_the_demo_parts() {
        let lib = Library::builtin();
        let data = SupplyData::builtin();
        for t in [
            "74HC04",
            "74HC161",
            "74HC574/ti-cd",
            "74HC138",
            "74HC86",
            "74HC283",
            "74HC173",
            "74HC245",
            "AT28C256-20",
            "62256-70",
        ] {
            let p = &lib.parts[lib.part_index(t).expect(t)];
            let d = data.of(&lib, p).expect(t);
            assert!(!d.family_default, "{t} has its own entry");
        }
        // NXP 74HC245 Rev. 03, table 9: CPD = 30 pF per transceiver
        let p = &lib.parts[lib.part_index("74HC245").unwrap()];
        assert_eq!(data.of(&lib, p).unwrap().cpd_pf, 30.0);
        // Microchip AT28C256 0006M §8: ICC 50 mA active
        let p = &lib.parts[lib.part_index("AT28C256-20").unwrap()];
        assert_eq!(data.of(&lib, p).unwrap().active_ma, 50.0);
    }

    #[test]
    fn a_bad_value_is_located() {
        let text = "[[family]]\nname = \"X\"\nkind = \"cmos\"\ncpd_pf = -3\nsource = \"s\"\nstatus = \"seen\"\n";
        let e = SupplyData::parse(&Source::new("s.toml", text)).unwrap_err();
        assert_eq!((e.line, e.column), (4, 10), "{e}");
    }

    #[test]
    fn a_part_without_a_type_is_located_at_its_table() {
        let text = "[[part]]\nkind = \"ttl\"\nsource = \"s\"\nstatus = \"seen\"\n";
        let e = SupplyData::parse(&Source::new("s.toml", text)).unwrap_err();
        assert!(e.message.contains("needs a type"), "{e}");
        assert!(e.line <= 2, "{e}");
    }

    #[test]
    fn icc_column_by_temperature() {
        let c = IccColumns(vec![(25.0, 4.0), (85.0, 40.0), (125.0, 160.0)]);
        assert_eq!(c.at(25.0), Some((4.0, false)));
        assert_eq!(c.at(70.0), Some((40.0, false)));
        assert_eq!(c.at(150.0), Some((160.0, true)));
    }
}

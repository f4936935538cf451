//! The part library: logic families and parts with their data-sheet timing columns.
//!
//! Built-in data files are embedded in the binary; a user folder of the same format adds parts or
//! replaces built-in ones by type name. Every value carries its source string and a status
//! ("seen" in a data sheet, or "from memory" and still to verify).

use std::collections::{BTreeMap, HashMap};
use std::path::Path;

use serde::Deserialize;
use toml::Spanned;

use super::derate::{self, Shape};
use crate::diag::{Source, SourceError};

/// The embedded data files, by the name shown in diagnostics.
pub const BUILTIN_FILES: &[(&str, &str)] = &[
    (
        "builtin:families.toml",
        include_str!("library/families.toml"),
    ),
    ("builtin:74hc.toml", include_str!("library/74hc.toml")),
    ("builtin:74hct.toml", include_str!("library/74hct.toml")),
    ("builtin:74ls.toml", include_str!("library/74ls.toml")),
    ("builtin:memory.toml", include_str!("library/memory.toml")),
    ("builtin:timer.toml", include_str!("library/timer.toml")),
];

/// How sure we are of a value.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Status {
    /// Read in the named data sheet (listed in the project's reference table).
    Seen,
    /// Not checked against the data sheet yet.
    FromMemory,
}

/// What a timing arc means.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ArcKind {
    /// Propagation delay from an input (or clock) to an output.
    Delay,
    /// Setup time an input needs before the capturing edge.
    Setup,
    /// Hold time an input needs after the capturing edge.
    Hold,
}

/// How a family's delays change with supply voltage.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum DeratingKind {
    /// Alpha-power law fitted over the family's voltage columns.
    AlphaPower,
    /// One supply column only: held constant inside the range.
    None,
}

/// A logic family's operating range and derating model.
#[derive(Clone, Debug)]
pub struct Family {
    /// Name, e.g. "74HC".
    pub name: String,
    /// Lowest specified supply.
    pub vcc_min_v: f64,
    /// Highest specified supply.
    pub vcc_max_v: f64,
    /// Nominal supply.
    pub vcc_nominal_v: f64,
    /// Default lower limit for a rail feeding this family.
    pub rail_limit_v: f64,
    /// Lowest rated ambient temperature.
    pub temp_min_c: f64,
    /// Highest rated ambient temperature.
    pub temp_max_c: f64,
    /// Voltage derating model.
    pub derating: DeratingKind,
    /// Family whose fitted shape this one uses (itself when `None`).
    pub shape_from: Option<String>,
    /// Extra delay per pF of load beyond the data-sheet load, at 4.5 V.
    pub load_ns_per_pf: f64,
    /// Where the range comes from.
    pub source: String,
    /// Fitted voltage shape (filled after loading).
    pub shape: Option<Shape>,
}

/// One data-sheet table row: delays in ns at the listed supply columns.
#[derive(Clone, Debug)]
pub struct Series {
    /// Supply columns in V, ascending.
    pub vcc_v: Vec<f64>,
    /// Value at each column in ns.
    pub ns: Vec<f64>,
    /// Load the data sheet used for these values.
    pub load_pf: f64,
    /// ln k of the fitted model for this row (0 when the family is not derated).
    pub ln_k: f64,
    /// ln(value / model) at each column: the model's error there.
    pub resid: Vec<f64>,
}

/// A temperature column: the row guaranteed up to `temp_c`.
#[derive(Clone, Debug)]
pub struct Column {
    /// Upper temperature of the data sheet's column (25, 85, 125 …).
    pub temp_c: f64,
    /// Its values.
    pub series: Series,
}

/// A timing arc of a part (delay, setup or hold) with its data-sheet rows.
#[derive(Clone, Debug)]
pub struct TimingArc {
    /// Arc name, e.g. "CLK->Q".
    pub name: String,
    /// Meaning.
    pub kind: ArcKind,
    /// Source of the values.
    pub source: String,
    /// Seen or from memory.
    pub status: Status,
    /// Guaranteed values (max for delays, the limit for setup/hold) per temperature column.
    pub worst: Vec<Column>,
    /// Typical row at 25 °C, if the data sheet gives one.
    pub typ: Option<Series>,
    /// Status of the typical row.
    pub typ_status: Status,
    /// Guaranteed minimum (contamination) delays per temperature column, rarely given.
    pub min: Vec<Column>,
}

/// A part type.
#[derive(Clone, Debug)]
pub struct Part {
    /// Type name, e.g. "74HC574".
    pub type_name: String,
    /// Index into [`Library::families`].
    pub family: usize,
    /// What it is.
    pub function: String,
    /// Data sheet.
    pub source: String,
    /// Seen or from memory.
    pub status: Status,
    /// Data-sheet load for its maxima.
    pub load_pf: f64,
    /// Its arcs.
    pub arcs: Vec<TimingArc>,
    /// The file it came from.
    pub origin: String,
}

impl Part {
    /// Arcs of `kind` named `name`.
    pub fn arc(&self, name: &str, kind: ArcKind) -> Option<usize> {
        self.arcs
            .iter()
            .position(|a| a.name == name && a.kind == kind)
    }

    /// Names of arcs of one kind, for hints.
    pub fn arc_names(&self, kind: ArcKind) -> Vec<&str> {
        let mut names: Vec<&str> = self
            .arcs
            .iter()
            .filter(|a| a.kind == kind)
            .map(|a| a.name.as_str())
            .collect();
        names.dedup();
        names
    }
}

/// Families and parts, with the voltage model fitted.
#[derive(Clone, Debug, Default)]
pub struct Library {
    /// All families.
    pub families: Vec<Family>,
    /// All parts.
    pub parts: Vec<Part>,
    by_type: HashMap<String, usize>,
    /// Notes about user parts that replaced built-in ones.
    pub notes: Vec<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFile {
    #[serde(default)]
    family: Vec<RawFamily>,
    #[serde(default)]
    part: Vec<RawPart>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFamily {
    name: Spanned<String>,
    vcc_min_v: f64,
    vcc_max_v: f64,
    vcc_nominal_v: f64,
    rail_limit_v: f64,
    temp_min_c: f64,
    temp_max_c: f64,
    derating: DeratingKind,
    shape_from: Option<Spanned<String>>,
    #[serde(default)]
    load_ns_per_pf: f64,
    source: String,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawPart {
    #[serde(rename = "type")]
    type_name: Spanned<String>,
    family: Spanned<String>,
    function: String,
    source: String,
    status: Status,
    load_pf: f64,
    vcc_v: Spanned<Vec<f64>>,
    #[serde(default)]
    arc: Vec<RawArc>,
}

type RawColumns = BTreeMap<String, Spanned<Vec<f64>>>;

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawArc {
    name: Spanned<String>,
    kind: Spanned<ArcKind>,
    source: Option<String>,
    status: Option<Status>,
    vcc_v: Option<Spanned<Vec<f64>>>,
    typ_ns: Option<Spanned<Vec<f64>>>,
    typ_vcc_v: Option<Vec<f64>>,
    typ_load_pf: Option<f64>,
    typ_status: Option<Status>,
    max_ns: Option<Spanned<RawColumns>>,
    limit_ns: Option<Spanned<RawColumns>>,
    min_ns: Option<Spanned<RawColumns>>,
}

fn series(
    src: &Source,
    vcc: &[f64],
    values: &Spanned<Vec<f64>>,
    load_pf: f64,
) -> Result<Series, Box<SourceError>> {
    if values.get_ref().len() != vcc.len() {
        return Err(src.fail(
            values.span(),
            format!(
                "{} values for {} supply columns ({:?} V)",
                values.get_ref().len(),
                vcc.len(),
                vcc
            ),
            "one value per column",
            Some("give one value per entry of vcc_v, in the same order".into()),
        ));
    }
    if let Some(bad) = values
        .get_ref()
        .iter()
        .find(|v| !(v.is_finite() && **v >= 0.0))
    {
        return Err(src.fail(
            values.span(),
            format!("time {bad} ns is not a finite, non-negative number"),
            "here",
            None,
        ));
    }
    Ok(Series {
        vcc_v: vcc.to_vec(),
        ns: values.get_ref().clone(),
        load_pf,
        ln_k: 0.0,
        resid: vec![0.0; vcc.len()],
    })
}

fn columns(
    src: &Source,
    vcc: &[f64],
    raw: &Spanned<RawColumns>,
    load_pf: f64,
) -> Result<Vec<Column>, Box<SourceError>> {
    let mut out = Vec::new();
    for (key, values) in raw.get_ref() {
        let temp_c: f64 = key.parse().map_err(|_| {
            src.fail(
                raw.span(),
                format!("temperature column \"{key}\" is not a number of °C"),
                "in this table",
                Some("key each row by its column's temperature: 25, 85, 125".into()),
            )
        })?;
        out.push(Column {
            temp_c,
            series: series(src, vcc, values, load_pf)?,
        });
    }
    out.sort_by(|a, b| a.temp_c.total_cmp(&b.temp_c));
    Ok(out)
}

fn check_vcc(src: &Source, vcc: &Spanned<Vec<f64>>) -> Result<(), Box<SourceError>> {
    let v = vcc.get_ref();
    let ok = !v.is_empty()
        && v.iter().all(|x| x.is_finite() && *x > 0.0)
        && v.windows(2).all(|w| w[0] < w[1]);
    if ok {
        Ok(())
    } else {
        Err(src.fail(
            vcc.span(),
            "supply columns must be positive and strictly ascending",
            "here",
            Some("e.g. vcc_v = [2.0, 4.5, 6.0]".into()),
        ))
    }
}

impl Library {
    /// The built-in library (embedded data files).
    pub fn builtin() -> Library {
        let sources: Vec<Source> = BUILTIN_FILES
            .iter()
            .map(|(name, text)| Source::new(*name, *text))
            .collect();
        Library::from_sources(&sources).expect("built-in part library is valid (tested)")
    }

    /// Built-in parts plus every `*.toml` file in `dir` (user parts replace built-in ones).
    pub fn with_user_dir(dir: &Path) -> Result<Library, LibraryError> {
        let mut sources: Vec<Source> = BUILTIN_FILES
            .iter()
            .map(|(name, text)| Source::new(*name, *text))
            .collect();
        let entries = std::fs::read_dir(dir).map_err(|e| LibraryError::Io {
            path: dir.display().to_string(),
            err: e,
        })?;
        let mut paths: Vec<_> = entries
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "toml"))
            .collect();
        paths.sort();
        for path in paths {
            let text = std::fs::read_to_string(&path).map_err(|e| LibraryError::Io {
                path: path.display().to_string(),
                err: e,
            })?;
            sources.push(Source::new(path.display().to_string(), text));
        }
        Library::from_sources(&sources).map_err(LibraryError::Source)
    }

    /// Parse library files in order; later parts replace earlier ones of the same type.
    pub fn from_sources(sources: &[Source]) -> Result<Library, Box<SourceError>> {
        let mut lib = Library::default();
        let mut pending_parts = Vec::new();
        for src in sources {
            let raw: RawFile = toml::from_str(&src.text).map_err(|e| src.toml_error(&e))?;
            for f in raw.family {
                if lib.families.iter().any(|x| x.name == *f.name.get_ref()) {
                    return Err(src.fail(
                        f.name.span(),
                        format!("family \"{}\" is defined twice", f.name.get_ref()),
                        "second definition",
                        None,
                    ));
                }
                if !(f.vcc_min_v > 0.0 && f.vcc_min_v < f.vcc_max_v) {
                    return Err(src.fail(
                        f.name.span(),
                        "family supply range must satisfy 0 < vcc_min_v < vcc_max_v",
                        "this family",
                        None,
                    ));
                }
                lib.families.push(Family {
                    name: f.name.into_inner(),
                    vcc_min_v: f.vcc_min_v,
                    vcc_max_v: f.vcc_max_v,
                    vcc_nominal_v: f.vcc_nominal_v,
                    rail_limit_v: f.rail_limit_v,
                    temp_min_c: f.temp_min_c,
                    temp_max_c: f.temp_max_c,
                    derating: f.derating,
                    shape_from: f.shape_from.map(Spanned::into_inner),
                    load_ns_per_pf: f.load_ns_per_pf,
                    source: f.source,
                    shape: None,
                });
            }
            for p in raw.part {
                pending_parts.push((src.clone(), p));
            }
        }
        for (src, p) in pending_parts {
            let part = lib.build_part(&src, p)?;
            match lib.by_type.get(&part.type_name) {
                Some(&i) => {
                    lib.notes.push(format!(
                        "part {} from {} replaces the one from {}",
                        part.type_name, part.origin, lib.parts[i].origin
                    ));
                    lib.parts[i] = part;
                }
                None => {
                    lib.by_type.insert(part.type_name.clone(), lib.parts.len());
                    lib.parts.push(part);
                }
            }
        }
        for fam in &lib.families {
            if let Some(from) = &fam.shape_from
                && !lib.families.iter().any(|f| &f.name == from)
            {
                return Err(Box::new(SourceError::from_plain(format!(
                    "family {} takes its voltage shape from unknown family {from}",
                    fam.name
                ))));
            }
        }
        derate::fit_library(&mut lib);
        Ok(lib)
    }

    fn build_part(&self, src: &Source, p: RawPart) -> Result<Part, Box<SourceError>> {
        let family = self
            .families
            .iter()
            .position(|f| f.name == *p.family.get_ref())
            .ok_or_else(|| {
                let names: Vec<&str> = self.families.iter().map(|f| f.name.as_str()).collect();
                src.fail(
                    p.family.span(),
                    format!("unknown logic family \"{}\"", p.family.get_ref()),
                    "not a known family",
                    Some(format!("known families: {}", names.join(", "))),
                )
            })?;
        check_vcc(src, &p.vcc_v)?;
        let mut arcs = Vec::new();
        for a in p.arc {
            let vcc = match &a.vcc_v {
                Some(v) => {
                    check_vcc(src, v)?;
                    v.get_ref().clone()
                }
                None => p.vcc_v.get_ref().clone(),
            };
            let kind = *a.kind.get_ref();
            let (worst, wrong) = match kind {
                ArcKind::Delay => (
                    &a.max_ns,
                    a.limit_ns.as_ref().map(|x| ("limit_ns", x.span())),
                ),
                ArcKind::Setup | ArcKind::Hold => {
                    (&a.limit_ns, a.max_ns.as_ref().map(|x| ("max_ns", x.span())))
                }
            };
            if let Some((key, span)) = wrong {
                return Err(src.fail(
                    span,
                    format!("{key} does not belong to a {kind:?} arc"),
                    "here",
                    Some(
                        "delays take max_ns (and typ_ns, min_ns); setup and hold take limit_ns"
                            .into(),
                    ),
                ));
            }
            let Some(worst) = worst else {
                return Err(src.fail(
                    a.name.span(),
                    format!(
                        "arc \"{}\" has no guaranteed values ({})",
                        a.name.get_ref(),
                        if kind == ArcKind::Delay {
                            "max_ns"
                        } else {
                            "limit_ns"
                        }
                    ),
                    "this arc",
                    Some("add the data sheet's guaranteed column(s) keyed by temperature".into()),
                ));
            };
            let worst = columns(src, &vcc, worst, p.load_pf)?;
            if worst.is_empty() {
                return Err(src.fail(
                    a.name.span(),
                    "arc has an empty table of guaranteed values",
                    "this arc",
                    None,
                ));
            }
            let typ = match &a.typ_ns {
                Some(t) => {
                    let tv = a.typ_vcc_v.clone().unwrap_or_else(|| vcc.clone());
                    Some(series(src, &tv, t, a.typ_load_pf.unwrap_or(p.load_pf))?)
                }
                None => None,
            };
            let min = match &a.min_ns {
                Some(m) => columns(src, &vcc, m, p.load_pf)?,
                None => Vec::new(),
            };
            let status = a.status.unwrap_or(p.status);
            arcs.push(TimingArc {
                name: a.name.into_inner(),
                kind,
                source: a.source.unwrap_or_else(|| p.source.clone()),
                status,
                worst,
                typ,
                typ_status: a.typ_status.unwrap_or(status),
                min,
            });
        }
        Ok(Part {
            type_name: p.type_name.into_inner(),
            family,
            function: p.function,
            source: p.source,
            status: p.status,
            load_pf: p.load_pf,
            arcs,
            origin: src.name.clone(),
        })
    }

    /// Index of a part type.
    pub fn part_index(&self, type_name: &str) -> Option<usize> {
        self.by_type.get(type_name).copied()
    }

    /// Type names close to `name` (same digits or a shared prefix), for "did you mean" hints.
    pub fn similar_parts(&self, name: &str) -> Vec<&str> {
        let digits: String = name.chars().filter(char::is_ascii_digit).collect();
        let upper = name.to_ascii_uppercase();
        let mut out: Vec<&str> = self
            .parts
            .iter()
            .map(|p| p.type_name.as_str())
            .filter(|t| {
                t.eq_ignore_ascii_case(name)
                    || (!digits.is_empty()
                        && t.chars().filter(char::is_ascii_digit).collect::<String>() == digits)
                    || (upper.len() >= 4 && t.to_ascii_uppercase().starts_with(&upper))
            })
            .collect();
        out.sort_unstable();
        out.truncate(8);
        out
    }

    /// The family of a part.
    pub fn family_of(&self, part: usize) -> &Family {
        &self.families[self.parts[part].family]
    }
}

/// Failure to read a user part library.
#[derive(Debug, thiserror::Error, miette::Diagnostic)]
pub enum LibraryError {
    /// A file or folder could not be read.
    #[error("cannot read part library {path}: {err}")]
    #[diagnostic(help("check the folder given to --parts exists and holds readable .toml files"))]
    Io {
        /// The path.
        path: String,
        /// The OS error.
        err: std::io::Error,
    },
    /// A file has an error at a location.
    #[error(transparent)]
    #[diagnostic(transparent)]
    Source(Box<SourceError>),
}

impl SourceError {
    /// An error with no useful location (whole-library consistency).
    pub fn from_plain(message: String) -> SourceError {
        Source::new("part library", "").error(0..0, message, "", None)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builtin_library_loads_with_enough_parts() {
        let lib = Library::builtin();
        assert!(lib.parts.len() >= 25, "{} parts", lib.parts.len());
        for fam in ["74HC", "74HCT", "74LS"] {
            assert!(
                lib.parts.iter().any(|p| lib.families[p.family].name == fam),
                "no {fam} part"
            );
        }
        for needed in [
            "74HC04",
            "74HC161",
            "74HC163",
            "74HC574",
            "74HC374",
            "74HC377",
            "74HC173",
            "74HC138",
            "74HC157",
            "74HC283",
            "74HC245",
            "74HCT245",
            "74LS161",
            "NE555",
            "AT28C256-20",
            "IC61C256AH-25",
        ] {
            assert!(lib.part_index(needed).is_some(), "{needed} missing");
        }
        for p in &lib.parts {
            assert!(!p.source.is_empty(), "{} has no source", p.type_name);
            assert!(!p.arcs.is_empty(), "{} has no arcs", p.type_name);
        }
    }

    #[test]
    fn user_file_replaces_builtin_part() {
        let mut sources: Vec<Source> = BUILTIN_FILES
            .iter()
            .map(|(n, t)| Source::new(*n, *t))
            .collect();
        sources.push(Source::new(
            "mine.toml",
            r#"
[[part]]
type = "74HC04"
family = "74HC"
function = "hex inverter, my measured batch"
source = "bench measurement"
status = "from-memory"
load_pf = 50
vcc_v = [5.0]
[[part.arc]]
name = "A->Y"
kind = "delay"
max_ns = { 25 = [11] }
"#,
        ));
        let lib = Library::from_sources(&sources).unwrap();
        let p = &lib.parts[lib.part_index("74HC04").unwrap()];
        assert_eq!(p.origin, "mine.toml");
        assert_eq!(lib.notes.len(), 1);
    }

    #[test]
    fn bad_library_file_points_at_the_problem() {
        let src = Source::new(
            "bad.toml",
            "[[part]]\ntype = \"X1\"\nfamily = \"74QQ\"\nfunction = \"x\"\nsource = \"s\"\nstatus = \"seen\"\nload_pf = 50\nvcc_v = [5.0]\n",
        );
        let mut all: Vec<Source> = BUILTIN_FILES
            .iter()
            .map(|(n, t)| Source::new(*n, *t))
            .collect();
        all.push(src);
        let err = Library::from_sources(&all).unwrap_err();
        assert!(err.message.contains("unknown logic family \"74QQ\""));
        assert_eq!((err.line, err.column), (3, 10));
    }
}

//! Reading library files: families, parts and their arcs, each checked with its location; then
//! the generic parts made from vendor variants ("74HC161" = the worst of "74HC161/onsemi", …).

use std::collections::HashMap;
use std::ops::Range;

use toml::Spanned;

use super::model::{ArcKind, Bound, Column, Family, Library, Part, Series, Status, TimingArc};
use super::raw::{RawArc, RawColumns, RawFamily, RawFile, RawPart, RawSlope};
use crate::diag::{Source, SourceError};

type Res<T> = Result<T, Box<SourceError>>;

/// Parse library files in order; later parts replace earlier ones of the same type.
///
/// Every file's families are read before any part, so a user file may use a built-in family.
/// The voltage shapes are not fitted yet.
pub(super) fn parse_sources(sources: &[Source]) -> Res<Library> {
    let mut lib = Library::default();
    let mut pending_parts = Vec::new();
    for src in sources {
        let raw: RawFile = toml::from_str(&src.text).map_err(|e| src.toml_error(&e))?;
        for f in raw.family {
            add_family(&mut lib, src, f)?;
        }
        pending_parts.extend(raw.part.into_iter().map(|p| (src, p)));
    }
    // where each part type was defined, for errors found across parts
    let mut at: HashMap<String, (&Source, Range<usize>)> = HashMap::new();
    for (src, p) in pending_parts {
        let span = p.type_name.span();
        let part = build_part(&lib, src, p)?;
        at.insert(part.type_name.clone(), (src, span));
        let note = format!("part {} from {} replaces", part.type_name, part.origin);
        if let Some(old) = lib.insert_part(part) {
            lib.notes
                .push(format!("{note} the one from {}", old.origin));
        }
    }
    check_shape_sources(&lib)?;
    synthesize_generics(&mut lib, &at)?;
    Ok(lib)
}

fn add_family(lib: &mut Library, src: &Source, f: RawFamily) -> Res<()> {
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
    let load = match &f.load_ns_per_pf {
        None => None,
        Some(slope) => {
            let (vcc, values) = match (slope.get_ref(), &f.load_vcc_v) {
                (RawSlope::One(x), None) => (vec![f.vcc_min_v], vec![*x]),
                (RawSlope::PerColumn(xs), Some(v)) if xs.len() == v.len() && !v.is_empty() => {
                    (v.clone(), xs.clone())
                }
                _ => {
                    return Err(src.fail(
                        slope.span(),
                        "load_ns_per_pf takes one number, or one number per entry of load_vcc_v",
                        "here",
                        Some("e.g. load_ns_per_pf = [0.50, 0.10, 0.09] with load_vcc_v = [2.0, 4.5, 6.0]".into()),
                    ));
                }
            };
            let ok = vcc.windows(2).all(|w| w[0] < w[1])
                && vcc.iter().all(|v| v.is_finite() && *v > 0.0)
                && values.iter().all(|x| x.is_finite() && *x >= 0.0);
            if !ok {
                return Err(src.fail(
                    slope.span(),
                    "load slopes must be finite and ≥ 0, at positive, ascending supply columns",
                    "here",
                    None,
                ));
            }
            Some(Series::new(vcc, values, 0.0, Bound::Upper))
        }
    };
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
        load,
        load_source: f.load_source,
        source: f.source,
        shape: None,
    });
    Ok(())
}

/// Every `shape_from` names a known family (checked once all files are read).
fn check_shape_sources(lib: &Library) -> Res<()> {
    for fam in &lib.families {
        if let Some(from) = &fam.shape_from
            && !lib.families.iter().any(|f| &f.name == from)
        {
            return Err(Box::new(Source::new("part library", "").error(
                0..0,
                format!(
                    "family {} takes its voltage shape from unknown family {from}",
                    fam.name
                ),
                "",
                None,
            )));
        }
    }
    Ok(())
}

/// Largest time a part file may give (1 s: a memory's write cycle is milliseconds).
const MAX_NS: f64 = 1e9;
/// Largest frequency a part file may give (10 GHz).
const MAX_MHZ: f64 = 1e4;
/// Largest test load a part file may give (10 nF).
const MAX_LOAD_PF: f64 = 1e4;

fn build_part(lib: &Library, src: &Source, p: RawPart) -> Res<Part> {
    let family = lib
        .families
        .iter()
        .position(|f| f.name == *p.family.get_ref())
        .ok_or_else(|| {
            let names: Vec<&str> = lib.families.iter().map(|f| f.name.as_str()).collect();
            src.fail(
                p.family.span(),
                format!("unknown logic family \"{}\"", p.family.get_ref()),
                "not a known family",
                Some(format!("known families: {}", names.join(", "))),
            )
        })?;
    check_vcc(src, &p.vcc_v)?;
    let fam = &lib.families[family];
    let temp_min_c = p.temp_min_c.unwrap_or(fam.temp_min_c);
    let temp_max_c = p.temp_max_c.unwrap_or(fam.temp_max_c);
    // NaN fails too
    if temp_min_c.partial_cmp(&temp_max_c) != Some(std::cmp::Ordering::Less) {
        return Err(src.fail(
            p.type_name.span(),
            "the part's temperature range must satisfy temp_min_c < temp_max_c",
            "this part",
            None,
        ));
    }
    let loads = std::iter::once(p.load_pf).chain(p.arc.iter().filter_map(|a| a.typ_load_pf));
    if let Some(bad) = loads
        .into_iter()
        .find(|l| !(l.is_finite() && *l > 0.0 && *l <= MAX_LOAD_PF))
    {
        return Err(src.fail(
            p.type_name.span(),
            format!("load {bad} pF of this part is not a positive number up to {MAX_LOAD_PF} pF"),
            "this part",
            Some("load_pf (and typ_load_pf) give the data sheet's test load, e.g. 50".into()),
        ));
    }
    let arcs = p
        .arc
        .iter()
        .map(|a| build_arc(src, &p, a, temp_min_c))
        .collect::<Res<Vec<_>>>()?;
    Ok(Part {
        type_name: p.type_name.into_inner(),
        family,
        function: p.function,
        source: p.source,
        status: p.status,
        load_pf: p.load_pf,
        temp_min_c,
        temp_max_c,
        clock_edge: p.clock_edge.unwrap_or_default(),
        arcs,
        origin: src.name.clone(),
        variants: Vec::new(),
    })
}

fn build_arc(src: &Source, p: &RawPart, a: &RawArc, temp_min_c: f64) -> Res<TimingArc> {
    let vcc = match &a.vcc_v {
        Some(v) => {
            check_vcc(src, v)?;
            v.get_ref().clone()
        }
        None => p.vcc_v.get_ref().clone(),
    };
    let kind = *a.kind.get_ref();
    // an fmax arc takes limit_mhz, or limit_ns for a minimum cycle time (a memory's tWC)
    let cycle_in_ns = kind == ArcKind::Fmax && a.limit_mhz.is_none() && a.limit_ns.is_some();
    let table = match (cycle_in_ns, &a.limit_ns) {
        (true, Some(t)) => t,
        _ => guaranteed_table(src, a, kind)?,
    };
    let mhz = kind == ArcKind::Fmax && !cycle_in_ns;
    let cols = Cols {
        src,
        vcc: &vcc,
        load_pf: p.load_pf,
        temp_min_c,
        mhz,
    };
    let worst = cols.columns(table, Bound::Upper)?;
    if worst.is_empty() {
        return Err(src.fail(
            a.name.span(),
            "arc has an empty table of guaranteed values",
            "this arc",
            None,
        ));
    }
    let is_fmax = kind == ArcKind::Fmax;
    let typ_values = match (&a.typ_ns, &a.typ_mhz) {
        (Some(t), None) if !is_fmax => Some((t, false)),
        (None, Some(t)) if is_fmax => Some((t, true)),
        (None, None) => None,
        (Some(t), _) | (_, Some(t)) => {
            return Err(src.fail(
                t.span(),
                "an fmax arc gives its typical value as typ_mhz, every other arc as typ_ns",
                "here",
                None,
            ));
        }
    };
    let typ = match typ_values {
        Some((t, in_mhz)) => {
            let tv = a.typ_vcc_v.clone().unwrap_or_else(|| vcc.clone());
            let load = a.typ_load_pf.unwrap_or(p.load_pf);
            Some(
                Cols {
                    mhz: in_mhz,
                    vcc: &tv,
                    load_pf: load,
                    ..cols
                }
                .series(t, Bound::Upper)?,
            )
        }
        None => None,
    };
    let min = match &a.min_ns {
        Some(m) if kind != ArcKind::Delay => {
            return Err(src.fail(
                m.span(),
                "min_ns belongs to a delay arc (a guaranteed minimum propagation delay)",
                "here",
                None,
            ));
        }
        Some(m) => {
            let mv = match &a.min_vcc_v {
                Some(v) => {
                    check_vcc(src, v)?;
                    v.get_ref().clone()
                }
                None => vcc.clone(),
            };
            Cols { vcc: &mv, ..cols }.columns(m, Bound::Lower)?
        }
        None => Vec::new(),
    };
    let status = a.status.unwrap_or(p.status);
    Ok(TimingArc {
        name: a.name.get_ref().clone(),
        kind,
        source: a.source.clone().unwrap_or_else(|| p.source.clone()),
        status,
        worst,
        typ,
        typ_status: a.typ_status.unwrap_or(status),
        min,
        variants: Vec::new(),
    })
}

/// The key each kind takes for its guaranteed values.
fn table_key(kind: ArcKind) -> &'static str {
    match kind {
        ArcKind::Delay => "max_ns",
        ArcKind::Fmax => "limit_mhz",
        _ => "limit_ns",
    }
}

/// The table of guaranteed values an arc of `kind` must have: `max_ns` for a delay,
/// `limit_mhz` for f_max, `limit_ns` for the others (another of these keys is an error).
fn guaranteed_table<'a>(
    src: &Source,
    a: &'a RawArc,
    kind: ArcKind,
) -> Res<&'a Spanned<RawColumns>> {
    let want = table_key(kind);
    let tables = [
        ("max_ns", &a.max_ns),
        ("limit_ns", &a.limit_ns),
        ("limit_mhz", &a.limit_mhz),
    ];
    for (key, t) in tables {
        if let Some(t) = t
            && key != want
        {
            return Err(src.fail(
                t.span(),
                format!("{key} does not belong to a {} arc", kind.name()),
                "here",
                Some(
                    "delays take max_ns (and typ_ns, min_ns); fmax takes limit_mhz (and typ_mhz); \
setup, hold and pulse widths take limit_ns"
                        .into(),
                ),
            ));
        }
    }
    tables
        .into_iter()
        .find(|(key, _)| *key == want)
        .and_then(|(_, t)| t.as_ref())
        .ok_or_else(|| {
            src.fail(
                a.name.span(),
                format!(
                    "arc \"{}\" has no guaranteed values ({want})",
                    a.name.get_ref()
                ),
                "this arc",
                Some("add the data sheet's guaranteed column(s) keyed by temperature".into()),
            )
        })
}

/// What every row of one arc shares: its supply columns, load, the part's lowest temperature
/// and whether the values are frequencies in MHz (held as periods in ns).
#[derive(Clone, Copy)]
struct Cols<'a> {
    src: &'a Source,
    vcc: &'a [f64],
    load_pf: f64,
    temp_min_c: f64,
    mhz: bool,
}

impl Cols<'_> {
    fn series(&self, values: &Spanned<Vec<f64>>, bound: Bound) -> Res<Series> {
        let src = self.src;
        if values.get_ref().len() != self.vcc.len() {
            return Err(src.fail(
                values.span(),
                format!(
                    "{} values for {} supply columns ({:?} V)",
                    values.get_ref().len(),
                    self.vcc.len(),
                    self.vcc
                ),
                "one value per column",
                Some("give one value per entry of vcc_v, in the same order".into()),
            ));
        }
        let bad = |v: &f64| {
            // beyond 10 GHz or 1 s no logic part's data sheet goes: a typing slip
            if self.mhz {
                !(v.is_finite() && *v > 0.0 && *v <= MAX_MHZ)
            } else {
                !(v.is_finite() && *v >= 0.0 && *v <= MAX_NS)
            }
        };
        if let Some(bad) = values.get_ref().iter().find(|v| bad(v)) {
            return Err(src.fail(
                values.span(),
                if self.mhz {
                    format!("frequency {bad} MHz is not a positive number up to {MAX_MHZ} MHz")
                } else {
                    format!("time {bad} ns is not a finite, non-negative number up to {MAX_NS} ns")
                },
                "here",
                None,
            ));
        }
        let ns = if self.mhz {
            values.get_ref().iter().map(|f| 1000.0 / f).collect()
        } else {
            values.get_ref().clone()
        };
        Ok(Series::new(self.vcc.to_vec(), ns, self.load_pf, bound))
    }

    fn columns(&self, raw: &Spanned<RawColumns>, bound: Bound) -> Res<Vec<Column>> {
        let mut out = Vec::new();
        for (key, values) in raw.get_ref() {
            let (temp_lo_c, temp_c) = temp_key(key, self.temp_min_c).ok_or_else(|| {
                self.src.fail(
                    raw.span(),
                    format!("temperature column \"{key}\" is not a temperature or range of °C"),
                    "in this table",
                    Some(
                        "key each row by its column: 25 (at 25 °C), 85 (up to 85 °C from the \
part's lowest rated temperature) or a range such as \"-55..25\""
                            .into(),
                    ),
                )
            })?;
            out.push(Column {
                temp_lo_c,
                temp_c,
                series: self.series(values, bound)?,
            });
        }
        out.sort_by(|a, b| a.temp_c.total_cmp(&b.temp_c));
        Ok(out)
    }
}

/// A column key: "25" is the 25 °C column; any other single temperature T covers the part's
/// lowest rated temperature to T (data sheets' "−40 to +85 °C"); "A..B" covers A to B.
fn temp_key(key: &str, temp_min_c: f64) -> Option<(f64, f64)> {
    let (lo, hi) = match key.split_once("..") {
        Some((a, b)) => (a.trim().parse().ok()?, b.trim().parse().ok()?),
        None => {
            let t: f64 = key.trim().parse().ok()?;
            if (t - 25.0).abs() < 1e-9 || t <= temp_min_c {
                (t, t)
            } else {
                (temp_min_c, t)
            }
        }
    };
    let ok = f64::is_finite(lo) && f64::is_finite(hi) && lo <= hi;
    ok.then_some((lo, hi))
}

fn check_vcc(src: &Source, vcc: &Spanned<Vec<f64>>) -> Res<()> {
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

/// For every "NAME/vendor" part whose NAME is not a part of its own, add NAME as the worst of
/// the variants: each arc any variant has, valued at the worst of the variants that have it.
fn synthesize_generics(
    lib: &mut Library,
    at: &HashMap<String, (&Source, Range<usize>)>,
) -> Res<()> {
    let mut groups: Vec<(String, Vec<usize>)> = Vec::new();
    for (i, p) in lib.parts.iter().enumerate() {
        let Some((base, _)) = p.type_name.split_once('/') else {
            continue;
        };
        match groups.iter_mut().find(|(b, _)| b == base) {
            Some((_, v)) => v.push(i),
            None => groups.push((base.to_string(), vec![i])),
        }
    }
    for (base, variants) in groups {
        if let Some(own) = lib.part_index(&base) {
            let p = &lib.parts[own];
            let names: Vec<&str> = variants
                .iter()
                .map(|&v| lib.parts[v].type_name.as_str())
                .collect();
            let note = format!(
                "part {base} from {} stands for itself, not for the worst of {}",
                p.origin,
                names.join(", ")
            );
            lib.notes.push(note);
            continue;
        }
        let first = &lib.parts[variants[0]];
        for &v in &variants[1..] {
            let p = &lib.parts[v];
            let mismatch = if p.family != first.family {
                Some("family")
            } else if p.clock_edge != first.clock_edge {
                Some("clock edge")
            } else {
                None
            };
            if let Some(what) = mismatch {
                let (src, span) = at[&p.type_name].clone();
                return Err(src.fail(
                    span,
                    format!(
                        "{} and {} are variants of {base} but differ in {what}",
                        first.type_name, p.type_name
                    ),
                    "this variant",
                    Some(
                        "variants of one generic part share family and clock edge; rename one"
                            .into(),
                    ),
                ));
            }
        }
        let generic = generic_part(lib, &base, &variants);
        lib.insert_part(generic);
    }
    Ok(())
}

/// What the variants of a generic part have in common: the comma-separated words of their
/// functions that all share from the start ("32K×8 OTP EPROM, 45 ns grade" of a commercial and
/// an industrial grade), so a generic never claims one variant's grade.
fn common_function(ps: &[&Part]) -> String {
    let first: Vec<&str> = ps[0].function.split(", ").collect();
    let shared = ps[1..].iter().fold(first.len(), |n, p| {
        p.function
            .split(", ")
            .zip(&first)
            .take(n)
            .take_while(|(a, b)| a == *b)
            .count()
    });
    if shared == 0 {
        ps[0].function.clone()
    } else {
        first[..shared].join(", ")
    }
}

/// The generic part standing for the worst of `variants`.
fn generic_part(lib: &Library, base: &str, variants: &[usize]) -> Part {
    let mut arcs: Vec<TimingArc> = Vec::new();
    for &v in variants {
        for (ai, a) in lib.parts[v].arcs.iter().enumerate() {
            let status = match &a.typ {
                Some(_) => a.status.worse(a.typ_status),
                None => a.status,
            };
            match arcs
                .iter_mut()
                .find(|x| x.name == a.name && x.kind == a.kind)
            {
                Some(x) => {
                    x.variants.push((v, ai));
                    x.status = x.status.worse(status);
                }
                None => arcs.push(TimingArc {
                    name: a.name.clone(),
                    kind: a.kind,
                    source: String::new(),
                    status,
                    worst: Vec::new(),
                    typ: None,
                    typ_status: Status::Seen,
                    min: Vec::new(),
                    variants: vec![(v, ai)],
                }),
            }
        }
    }
    for a in &mut arcs {
        let names: Vec<&str> = a
            .variants
            .iter()
            .map(|&(p, _)| lib.parts[p].type_name.as_str())
            .collect();
        a.source = format!("worst of {}", names.join(", "));
        a.typ_status = a.status;
    }
    let ps: Vec<&Part> = variants.iter().map(|&v| &lib.parts[v]).collect();
    let names: Vec<&str> = ps.iter().map(|p| p.type_name.as_str()).collect();
    Part {
        type_name: base.to_string(),
        family: ps[0].family,
        function: common_function(&ps),
        source: format!("worst of the library's variants {}", names.join(", ")),
        status: ps
            .iter()
            .map(|p| p.status)
            .chain(arcs.iter().map(|a| a.status))
            .fold(Status::Seen, Status::worse),
        load_pf: ps.iter().map(|p| p.load_pf).fold(0.0, f64::max),
        temp_min_c: ps.iter().map(|p| p.temp_min_c).fold(f64::MIN, f64::max),
        temp_max_c: ps.iter().map(|p| p.temp_max_c).fold(f64::MAX, f64::min),
        clock_edge: ps[0].clock_edge,
        arcs,
        origin: "generic: ".to_string() + &names.join(", "),
        variants: variants.to_vec(),
    }
}

//! Reading library files: families, parts and their arcs, each checked with its location.

use toml::Spanned;

use super::model::{ArcKind, Column, Family, Library, Part, Series, TimingArc};
use super::raw::{RawArc, RawColumns, RawFamily, RawFile, RawPart};
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
    for (src, p) in pending_parts {
        let part = build_part(&lib, src, p)?;
        let note = format!("part {} from {} replaces", part.type_name, part.origin);
        if let Some(old) = lib.insert_part(part) {
            lib.notes
                .push(format!("{note} the one from {}", old.origin));
        }
    }
    check_shape_sources(&lib)?;
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
    let arcs = p
        .arc
        .iter()
        .map(|a| build_arc(src, &p, a))
        .collect::<Res<Vec<_>>>()?;
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

fn build_arc(src: &Source, p: &RawPart, a: &RawArc) -> Res<TimingArc> {
    let vcc = match &a.vcc_v {
        Some(v) => {
            check_vcc(src, v)?;
            v.get_ref().clone()
        }
        None => p.vcc_v.get_ref().clone(),
    };
    let kind = *a.kind.get_ref();
    let worst = columns(src, &vcc, guaranteed_table(src, a, kind)?, p.load_pf)?;
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
    Ok(TimingArc {
        name: a.name.get_ref().clone(),
        kind,
        source: a.source.clone().unwrap_or_else(|| p.source.clone()),
        status,
        worst,
        typ,
        typ_status: a.typ_status.unwrap_or(status),
        min,
    })
}

/// The table of guaranteed values an arc of `kind` must have: `max_ns` for a delay, `limit_ns`
/// for setup and hold (the other key is an error).
fn guaranteed_table<'a>(
    src: &Source,
    a: &'a RawArc,
    kind: ArcKind,
) -> Res<&'a Spanned<RawColumns>> {
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
            Some("delays take max_ns (and typ_ns, min_ns); setup and hold take limit_ns".into()),
        ));
    }
    worst.as_ref().ok_or_else(|| {
        src.fail(
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
        )
    })
}

fn series(src: &Source, vcc: &[f64], values: &Spanned<Vec<f64>>, load_pf: f64) -> Res<Series> {
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

fn columns(src: &Source, vcc: &[f64], raw: &Spanned<RawColumns>, load_pf: f64) -> Res<Vec<Column>> {
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

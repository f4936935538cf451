//! A design file of long and compact forms, and the files it includes, as one list of long-form
//! entries: instance groups become one part each, register groups launches and captures, buses
//! their data and enable arcs and captures, chains their arcs, includes the included file's
//! entries with its names prefixed. Entries keep file order (an include's entries stand where
//! the include is); spans keep pointing where each entry was written.

use std::ops::Range;

use toml::Spanned;

use super::chain;
use super::compact::{Names, RawBus, RawInclude, RawRegisters};
use super::files::{Files, IncludeReader};
use super::load::Res;
use super::moved::{Moved, moved};
use super::raw::{
    PartDecl, RawArc, RawCapture, RawDesign, RawLaunch, RawOverride, RawPart, RawVia, ViaEntry,
};
use crate::diag::{Source, SourceError};

/// Deepest include nesting and most files in one design.
const MAX_DEPTH: usize = 8;
const MAX_FILES: usize = 64;

/// The long-form entries of a design and every file it includes.
#[derive(Default)]
pub(super) struct Flat {
    pub parts: Vec<PartDecl>,
    pub launches: Vec<RawLaunch>,
    pub arcs: Vec<RawArc>,
    pub captures: Vec<RawCapture>,
    pub overrides: Vec<RawOverride>,
    /// Every bus driver with the control bit that turns it on (for `check`).
    pub drivers: Vec<BusDriver>,
}

/// A bus driver as `check` sees it: the bus, the part, its `when` control bit.
#[derive(Clone)]
pub(super) struct BusDriver {
    pub bus: Spanned<String>,
    pub part: Spanned<String>,
    pub when: Option<Spanned<String>>,
}

impl Moved for BusDriver {
    fn moved(self, by: usize) -> Self {
        BusDriver {
            bus: moved(self.bus, by),
            part: moved(self.part, by),
            when: self.when.map(|w| moved(w, by)),
        }
    }
}

/// Entries with the place they were written (a byte offset in their file) to keep file order.
#[derive(Default)]
struct Keyed {
    parts: Vec<(usize, PartDecl)>,
    launches: Vec<(usize, RawLaunch)>,
    arcs: Vec<(usize, RawArc)>,
    captures: Vec<(usize, RawCapture)>,
    overrides: Vec<(usize, RawOverride)>,
    drivers: Vec<(usize, BusDriver)>,
}

/// What reading a design's files shares.
pub(super) struct Ctx<'a> {
    pub files: Files,
    pub reader: &'a dyn IncludeReader,
    /// The chain of files being included (for loops): identity and name of each.
    stack: Vec<(String, String)>,
}

impl<'a> Ctx<'a> {
    pub fn new(top: &Source, reader: &'a dyn IncludeReader) -> Ctx<'a> {
        Ctx {
            files: Files::new(top),
            reader,
            stack: vec![(reader.identity(top), top.name.clone())],
        }
    }
}

/// A design file's entries (and its includes'), spans offset by `base`, the file's own.
pub(super) fn expand(src: &Source, base: usize, raw: &RawDesign, ctx: &mut Ctx) -> Res<Flat> {
    let mut k = Keyed::default();
    own_entries(src, raw, &mut k)?;
    if base > 0 {
        k.shift(base);
    }
    for inc in &raw.include {
        let at = inc.file.span().start;
        let inner = include(src, base, inc, ctx)?;
        k.parts.extend(inner.parts.into_iter().map(|x| (at, x)));
        k.launches
            .extend(inner.launches.into_iter().map(|x| (at, x)));
        k.arcs.extend(inner.arcs.into_iter().map(|x| (at, x)));
        k.captures
            .extend(inner.captures.into_iter().map(|x| (at, x)));
        k.overrides
            .extend(inner.overrides.into_iter().map(|x| (at, x)));
        k.drivers.extend(inner.drivers.into_iter().map(|x| (at, x)));
    }
    Ok(k.sorted())
}

/// The file's own entries, long and compact, with their places.
fn own_entries(src: &Source, raw: &RawDesign, k: &mut Keyed) -> Res<()> {
    for p in &raw.part {
        part(src, p, k)?;
    }
    for g in &raw.register {
        registers(src, g, k)?;
    }
    for b in &raw.bus {
        bus(src, b, k)?;
    }
    for c in &raw.chains {
        for a in chain::parse(src, c)? {
            k.arcs.push((
                c.span().start,
                RawArc {
                    from: a.from,
                    to: a.to,
                    part: Some(a.part),
                    arc: Some(a.arc),
                    delay: None,
                    name: None,
                },
            ));
        }
    }
    for l in &raw.launch {
        let mut l = l.clone();
        l.clock_via = vias(src, &l.clock_via)?;
        k.launches.push((l.part.span().start, l));
    }
    for a in &raw.arc {
        k.arcs.push((a.from.span().start, a.clone()));
    }
    for c in &raw.capture {
        let mut c = c.clone();
        c.clock_via = vias(src, &c.clock_via)?;
        k.captures.push((c.signal.span().start, c));
    }
    for o in &raw.overrides {
        k.overrides.push((o.part.span().start, o.clone()));
    }
    Ok(())
}

/// A `[[part]]`: one `ref`, or an instance group's `refs`.
fn part(src: &Source, p: &RawPart, k: &mut Keyed) -> Res<()> {
    let refs: Vec<Spanned<String>> = match (&p.reference, &p.refs) {
        (Some(r), None) => vec![r.clone()],
        (None, Some(rs)) if !rs.get_ref().is_empty() => rs.get_ref().clone(),
        (None, Some(rs)) => {
            return Err(src.fail(
                rs.span(),
                "empty refs list",
                "no reference here",
                Some("list the group's designators: refs = [\"U1\", \"U2\"]".into()),
            ));
        }
        (Some(r), Some(_)) => {
            return Err(src.fail(
                r.span(),
                "a [[part]] takes ref (one instance) or refs (a group), not both",
                "both given",
                Some("move this reference into the refs list".into()),
            ));
        }
        (None, None) => {
            return Err(src.fail(
                p.type_name.span(),
                format!(
                    "[[part]] of type \"{}\" names no reference",
                    p.type_name.get_ref()
                ),
                "which instance?",
                Some("add ref = \"U1\", or refs = [\"U1\", \"U2\"] for several alike".into()),
            ));
        }
    };
    for r in refs {
        k.parts.push((
            r.span().start,
            PartDecl {
                reference: r,
                type_name: p.type_name.clone(),
                section: p.section.clone(),
                load: p.load.clone(),
            },
        ));
    }
    Ok(())
}

/// A register group: per member a part (when a type is given), a launch, a capture.
fn registers(src: &Source, g: &RawRegisters, k: &mut Keyed) -> Res<()> {
    let via = vias(src, &g.clock_via)?;
    for m in &g.members {
        let at = m.reference.span().start;
        let here = m.reference.span();
        match (m.type_name.as_ref().or(g.type_name.as_ref()), &m.section) {
            (Some(t), _) => k.parts.push((
                at,
                PartDecl {
                    reference: m.reference.clone(),
                    type_name: t.clone(),
                    section: m.section.clone().or_else(|| g.section.clone()),
                    load: m.load.clone(),
                },
            )),
            (None, Some(s)) => {
                return Err(src.fail(
                    s.span(),
                    "a section here needs the member's type",
                    "no type to declare the part with",
                    Some(format!(
                        "add type = \"…\" to declare {} here, or give its section in its [[part]]",
                        m.reference.get_ref()
                    )),
                ));
            }
            (None, None) if g.section.is_some() || m.load.is_some() => {
                let s = g.section.as_ref().map_or(here.clone(), |s| s.span());
                return Err(src.fail(
                    s,
                    "section and load of a register group need its type",
                    "no type to declare the parts with",
                    Some("add type = \"…\" to the group, or set them in [[part]]".into()),
                ));
            }
            (None, None) => {}
        }
        if m.q.is_none() && m.d.is_none() {
            return Err(src.fail(
                here,
                format!(
                    "register {} has neither q nor d: it launches and captures nothing",
                    m.reference.get_ref()
                ),
                "this member",
                Some("add q = \"signal it drives\" and/or d = \"signal it captures\"".into()),
            ));
        }
        // several signals: one launch (capture) each, named after its signal
        let named = |n: &Option<String>, suffix: String, many: bool, s: &Spanned<String>| {
            n.as_ref().map(|n| {
                if many {
                    format!("{n}{suffix} {}", s.get_ref())
                } else {
                    format!("{n}{suffix}")
                }
            })
        };
        if let Some(q) = &m.q {
            let arc = m.arc.clone().or_else(|| g.arc.clone());
            let qs = Names::spanned(q);
            for s in &qs {
                k.launches.push((
                    at,
                    RawLaunch {
                        name: named(&m.name, String::new(), qs.len() > 1, s),
                        edge: g.edge,
                        part: m.reference.clone(),
                        arc: arc
                            .clone()
                            .unwrap_or_else(|| Spanned::new(here.clone(), "CLK->Q".into())),
                        to: s.clone(),
                        clock_via: via.clone(),
                    },
                ));
            }
        }
        if let Some(d) = &m.d {
            let check = m
                .check
                .clone()
                .or_else(|| g.check.clone())
                .unwrap_or_else(|| Spanned::new(here.clone(), "D->CLK".into()));
            let pin = check
                .get_ref()
                .split("->")
                .next()
                .unwrap_or("")
                .trim()
                .to_string();
            let ds = Names::spanned(d);
            for s in &ds {
                k.captures.push((
                    at,
                    RawCapture {
                        name: named(&m.name, format!(" {pin}"), ds.len() > 1, s),
                        signal: s.clone(),
                        edge: g.edge,
                        part: Some(m.reference.clone()),
                        check: Some(check.clone()),
                        setup: None,
                        hold: None,
                        clock_via: via.clone(),
                    },
                ));
            }
        }
    }
    Ok(())
}

/// A bus: each driver's data arcs (and enable arcs) onto the bus signal, each sink a capture.
fn bus(src: &Source, b: &RawBus, k: &mut Keyed) -> Res<()> {
    for d in &b.drivers {
        let at = d.part.span().start;
        k.drivers.push((
            at,
            BusDriver {
                bus: b.signal.clone(),
                part: d.part.clone(),
                when: d.when.clone(),
            },
        ));
        let arc_of = |own: &Option<Spanned<String>>, shared: &Option<Spanned<String>>, key| {
            own.clone().or_else(|| shared.clone()).ok_or_else(|| {
                src.fail(
                    d.part.span(),
                    format!(
                        "driver {} of bus \"{}\" has no {key}",
                        d.part.get_ref(),
                        b.signal.get_ref()
                    ),
                    "which arc of this part?",
                    Some(format!(
                        "add {key} = \"…\" (e.g. \"{}\") to the [[bus]] or to this driver",
                        if key == "data_arc" { "A->B" } else { "OE->B" }
                    )),
                )
            })
        };
        let data = arc_of(&d.data_arc, &b.data_arc, "data_arc")?;
        let mut add = |from: Spanned<String>, arc: &Spanned<String>| {
            k.arcs.push((
                at,
                RawArc {
                    from,
                    to: b.signal.clone(),
                    part: Some(d.part.clone()),
                    arc: Some(arc.clone()),
                    delay: None,
                    name: None,
                },
            ))
        };
        for from in Names::spanned(&d.from) {
            add(from, &data);
        }
        if let Some(en) = &d.enable {
            let arc = arc_of(&d.enable_arc, &b.enable_arc, "enable_arc")?;
            for from in Names::spanned(en) {
                add(from, &arc);
            }
        }
    }
    for s in &b.sinks {
        k.captures.push((
            s.edge.span().start,
            RawCapture {
                name: s.name.clone(),
                signal: b.signal.clone(),
                edge: *s.edge.get_ref(),
                part: s.part.clone(),
                check: s.check.clone(),
                setup: s.setup.clone(),
                hold: s.hold.clone(),
                clock_via: vias(src, &s.clock_via)?,
            },
        ));
    }
    Ok(())
}

/// Clock buffers with the short strings turned into tables.
fn vias(src: &Source, list: &[Spanned<ViaEntry>]) -> Res<Vec<Spanned<ViaEntry>>> {
    list.iter()
        .map(|v| match v.get_ref() {
            ViaEntry::Table(_) => Ok(v.clone()),
            ViaEntry::Short(s) => {
                let (part, arc) = chain::part_and_arc(src, &Spanned::new(v.span(), s.clone()))?;
                Ok(Spanned::new(
                    v.span(),
                    ViaEntry::Table(RawVia { part, arc }),
                ))
            }
        })
        .collect()
}

/// One `[[include]]`: the file read, checked, expanded, its names prefixed.
fn include(src: &Source, base: usize, inc: &RawInclude, ctx: &mut Ctx) -> Res<Flat> {
    let here = inc.file.span();
    let fail =
        |msg: String, help: &str| src.fail(here.clone(), msg, "this include", Some(help.into()));
    if ctx.stack.len() > MAX_DEPTH || ctx.files.count() >= MAX_FILES {
        return Err(fail(
            format!("too many included files (at most {MAX_FILES}, {MAX_DEPTH} deep)"),
            "include fewer files, or merge small ones",
        ));
    }
    let inner_src = ctx.reader.read(src, inc.file.get_ref()).map_err(|e| {
        fail(
            format!("cannot read included file \"{}\": {e}", inc.file.get_ref()),
            "the path is relative to the folder of the file that includes it",
        )
    })?;
    let identity = ctx.reader.identity(&inner_src);
    if ctx.stack.iter().any(|(id, _)| *id == identity) {
        let mut chain: Vec<String> = ctx.stack.iter().map(|(_, n)| n.clone()).collect();
        chain.push(inner_src.name.clone());
        return Err(fail(
            format!("include loop: {}", chain.join(" includes ")),
            "a file may not include itself, directly or through others",
        ));
    }
    let (line, column) = src.line_col(here.start);
    let from = format!("{}:{line}:{column}", src.name);
    // errors met while reading the included file itself say where it is included
    let noted = |mut e: Box<SourceError>| {
        if e.file == inner_src.name && !e.help.as_deref().is_some_and(|h| h.contains("included at"))
        {
            e.help = Some(match e.help.take() {
                Some(h) => format!("{h} (this file is included at {from})"),
                None => format!("this file is included at {from}"),
            });
        }
        e
    };
    let raw: RawDesign =
        toml::from_str(&inner_src.text).map_err(|e| noted(Box::new(inner_src.toml_error(&e))))?;
    top_only(&inner_src, &raw).map_err(noted)?;
    let prefix = match &inc.prefix {
        Some(p) if p.get_ref().chars().any(char::is_whitespace) => {
            return Err(src.fail(
                p.span(),
                "a prefix may not contain spaces",
                "here",
                Some("use e.g. prefix = \"b2_\"".into()),
            ));
        }
        Some(p) => p.get_ref().clone(),
        None => String::new(),
    };
    let inner_base = ctx.files.add(inner_src.clone(), from.clone());
    ctx.stack.push((identity, inner_src.name.clone()));
    let flat = expand(&inner_src, inner_base, &raw, ctx);
    ctx.stack.pop();
    let mut flat = flat.map_err(noted)?;
    let rename = |n: &Spanned<String>| {
        let v = match inc.connect.get(n.get_ref().trim()) {
            Some(outer) => outer.get_ref().clone(),
            None => format!("{prefix}{}", n.get_ref().trim()),
        };
        Spanned::new(n.span(), v)
    };
    let section = inc.section.clone().map(|s| moved(s, base));
    flat.rename(&rename, section.as_ref());
    Ok(flat)
}

/// Settings only the top design file makes: an included file may not make them.
fn top_only(src: &Source, raw: &RawDesign) -> Res<()> {
    let found: Option<(Range<usize>, &str)> = raw
        .operating
        .as_ref()
        .map(|o| (o.span(), "[operating]"))
        .or_else(|| raw.clock.as_ref().map(|c| (c.span(), "[clock]")))
        .or_else(|| raw.section.first().map(|s| (s.name.span(), "[[section]]")))
        .or_else(|| {
            raw.microstep
                .first()
                .map(|s| (s.name.span(), "[[microstep]]"))
        })
        .or_else(|| raw.supply.as_ref().map(|s| (s.span(), "[supply]")))
        .or_else(|| raw.feed.first().map(|s| (s.span(), "[[feed]]")))
        .or_else(|| raw.led.first().map(|s| (s.span(), "[[led]]")))
        .or_else(|| raw.load.first().map(|s| (s.span(), "[[load]]")));
    match found {
        Some((span, what)) => Err(src.fail(
            span,
            format!("an included design file may not set {what}"),
            "only the top design sets this",
            Some(
                "move it into the design that includes this file; parts here may name its sections"
                    .into(),
            ),
        )),
        None => Ok(()),
    }
}

impl Keyed {
    /// Every span offset by a file's base (the keys stay places in the file).
    fn shift(&mut self, by: usize) {
        fn all<T: Moved>(v: &mut Vec<(usize, T)>, by: usize) {
            *v = std::mem::take(v)
                .into_iter()
                .map(|(k, x)| (k, x.moved(by)))
                .collect();
        }
        all(&mut self.parts, by);
        all(&mut self.launches, by);
        all(&mut self.arcs, by);
        all(&mut self.captures, by);
        all(&mut self.overrides, by);
        all(&mut self.drivers, by);
    }

    /// In file order (a stable sort: entries written in one place keep their order).
    fn sorted(mut self) -> Flat {
        fn strip<T>(v: &mut Vec<(usize, T)>) -> Vec<T> {
            let mut v = std::mem::take(v);
            v.sort_by_key(|(k, _)| *k);
            v.into_iter().map(|(_, x)| x).collect()
        }
        Flat {
            parts: strip(&mut self.parts),
            launches: strip(&mut self.launches),
            arcs: strip(&mut self.arcs),
            captures: strip(&mut self.captures),
            overrides: strip(&mut self.overrides),
            drivers: strip(&mut self.drivers),
        }
    }
}

impl Flat {
    /// Part references and signal names through `rename`; parts without a section get
    /// `section`.
    fn rename(
        &mut self,
        rename: &dyn Fn(&Spanned<String>) -> Spanned<String>,
        section: Option<&Spanned<String>>,
    ) {
        let via = |v: &mut Spanned<ViaEntry>| {
            let span = v.span();
            if let ViaEntry::Table(t) = v.get_ref() {
                let t = RawVia {
                    part: rename(&t.part),
                    arc: t.arc.clone(),
                };
                *v = Spanned::new(span, ViaEntry::Table(t));
            }
        };
        for p in &mut self.parts {
            p.reference = rename(&p.reference);
            if p.section.is_none() {
                p.section = section.cloned();
            }
        }
        for l in &mut self.launches {
            l.part = rename(&l.part);
            l.to = rename(&l.to);
            l.clock_via.iter_mut().for_each(via);
        }
        for a in &mut self.arcs {
            a.from = rename(&a.from);
            a.to = rename(&a.to);
            a.part = a.part.as_ref().map(rename);
        }
        for c in &mut self.captures {
            c.signal = rename(&c.signal);
            c.part = c.part.as_ref().map(rename);
            c.clock_via.iter_mut().for_each(via);
        }
        for o in &mut self.overrides {
            o.part = rename(&o.part);
        }
        // control bits are the machine's own control word: an include does not rename them
        for d in &mut self.drivers {
            d.bus = rename(&d.bus);
            d.part = rename(&d.part);
        }
    }
}

//! Long-form entries with every span moved by a file's base: an included file's entries keep
//! pointing into that file (see `files.rs`).

use toml::Spanned;

use super::raw::{
    PartDecl, RawArc, RawCapture, RawFixed, RawLaunch, RawOverride, RawVia, ViaEntry,
};

/// A span moved by `by`.
pub(super) fn moved<T>(s: Spanned<T>, by: usize) -> Spanned<T> {
    let r = s.span();
    Spanned::new(r.start + by..r.end + by, s.into_inner())
}

fn moved_opt<T>(s: Option<Spanned<T>>, by: usize) -> Option<Spanned<T>> {
    s.map(|s| moved(s, by))
}

fn moved_vias(list: Vec<Spanned<ViaEntry>>, by: usize) -> Vec<Spanned<ViaEntry>> {
    list.into_iter()
        .map(|v| {
            let span = v.span();
            let entry = match v.into_inner() {
                ViaEntry::Table(t) => ViaEntry::Table(RawVia {
                    part: moved(t.part, by),
                    arc: moved(t.arc, by),
                }),
                short => short,
            };
            Spanned::new(span.start + by..span.end + by, entry)
        })
        .collect()
}

/// An entry whose spans can be moved.
pub(super) trait Moved {
    fn moved(self, by: usize) -> Self;
}

impl Moved for PartDecl {
    fn moved(self, by: usize) -> Self {
        PartDecl {
            reference: moved(self.reference, by),
            type_name: moved(self.type_name, by),
            section: moved_opt(self.section, by),
            load: moved_opt(self.load, by),
        }
    }
}

impl Moved for RawLaunch {
    fn moved(self, by: usize) -> Self {
        RawLaunch {
            name: self.name,
            edge: self.edge,
            part: moved(self.part, by),
            arc: moved(self.arc, by),
            to: moved(self.to, by),
            clock_via: moved_vias(self.clock_via, by),
        }
    }
}

impl Moved for RawArc {
    fn moved(self, by: usize) -> Self {
        let delay = self.delay.map(|d| {
            let span = d.span();
            let f = d.into_inner();
            Spanned::new(
                span.start + by..span.end + by,
                RawFixed {
                    min: moved_opt(f.min, by),
                    typ: moved_opt(f.typ, by),
                    max: moved(f.max, by),
                },
            )
        });
        RawArc {
            from: moved(self.from, by),
            to: moved(self.to, by),
            part: moved_opt(self.part, by),
            arc: moved_opt(self.arc, by),
            delay,
            name: self.name,
        }
    }
}

impl Moved for RawCapture {
    fn moved(self, by: usize) -> Self {
        RawCapture {
            name: self.name,
            signal: moved(self.signal, by),
            edge: self.edge,
            part: moved_opt(self.part, by),
            check: moved_opt(self.check, by),
            setup: moved_opt(self.setup, by),
            hold: moved_opt(self.hold, by),
            clock_via: moved_vias(self.clock_via, by),
        }
    }
}

impl Moved for RawOverride {
    fn moved(self, by: usize) -> Self {
        RawOverride {
            part: moved(self.part, by),
            arc: moved(self.arc, by),
            kind: self.kind,
            min: moved_opt(self.min, by),
            typ: moved_opt(self.typ, by),
            max: moved_opt(self.max, by),
            scale: moved_opt(self.scale, by),
        }
    }
}

//! Resolving the timing entries: launches, delay arcs between signals, and captures.

use std::ops::Range;

use toml::Spanned;

use super::load::{Loader, Res};
use super::model::{Capture, Delay, GraphArc, Launch};
use super::raw::{RawArc, RawCapture, RawLaunch};
use crate::budget::library::model::ArcKind;

impl Loader<'_> {
    /// Every launch: a clock edge through a part's clock-to-output arc onto a signal.
    pub fn launches(&mut self, raw: &[RawLaunch]) -> Res<Vec<Launch>> {
        let mut launches = Vec::new();
        for l in raw {
            let delay = self.part_delay(&l.part, &l.arc)?;
            let to = self.signal(&l.to)?;
            launches.push(Launch {
                name: l
                    .name
                    .clone()
                    .unwrap_or_else(|| format!("{} {}", l.part.get_ref(), l.arc.get_ref())),
                edge: l.edge,
                clock_via: self.via(&l.clock_via)?,
                delay,
                to,
            });
        }
        Ok(launches)
    }

    /// Every delay arc, with the span of each (from `from` to `to`) for loop diagnostics.
    pub fn arcs(&mut self, raw: &[RawArc]) -> Res<(Vec<GraphArc>, Vec<Range<usize>>)> {
        let mut arcs = Vec::new();
        let mut spans = Vec::new();
        for a in raw {
            let from = self.signal(&a.from)?;
            let to = self.signal(&a.to)?;
            let delay = self.arc_delay(a)?;
            arcs.push(GraphArc { from, to, delay });
            spans.push(a.from.span().start..a.to.span().end);
        }
        Ok((arcs, spans))
    }

    /// An arc's delay: a part's arc or a fixed delay table, never both or neither.
    fn arc_delay(&self, a: &RawArc) -> Res<Delay> {
        match (&a.part, &a.arc, &a.delay) {
            (Some(p), Some(arc), None) => self.part_delay(p, arc),
            (None, None, Some(f)) => {
                self.fixed(f, a.name.clone().unwrap_or_else(|| "fixed delay".into()))
            }
            (Some(p), None, None) => Err(self.err(
                p.span(),
                "arc names a part but not which of its arcs",
                "part without arc",
                Some("add arc = \"A->Y\" (the part's timing arc)".into()),
            )),
            (None, Some(arc), None) => Err(self.err(
                arc.span(),
                "arc names a timing arc but not the part",
                "arc without part",
                Some("add part = \"U…\"".into()),
            )),
            (_, _, Some(f)) if a.part.is_some() || a.arc.is_some() => Err(self.err(
                f.span(),
                "an arc takes either part + arc or a fixed delay, not both",
                "both given",
                Some("remove the delay table or the part/arc keys".into()),
            )),
            _ => Err(self.err(
                a.from.span(),
                format!(
                    "arc {} -> {} has no delay",
                    a.from.get_ref(),
                    a.to.get_ref()
                ),
                "no delay",
                Some("give part = \"U…\" and arc = \"A->Y\", or delay = { max = \"5 ns\" }".into()),
            )),
        }
    }

    /// Every capture: a driven signal, its clock edge and its setup (and hold) requirement.
    pub fn captures(&self, raw: &[RawCapture]) -> Res<Vec<Capture>> {
        let mut captures = Vec::new();
        for c in raw {
            let signal = self.driven_signal(&c.signal)?;
            let (setup, hold) = self.checks(c)?;
            captures.push(Capture {
                name: c.name.clone().unwrap_or_else(|| {
                    format!(
                        "{} at {}",
                        c.signal.get_ref(),
                        c.part.as_ref().map_or("capture", |p| p.get_ref().as_str())
                    )
                }),
                signal,
                edge: c.edge,
                clock_via: self.via(&c.clock_via)?,
                setup,
                hold,
            });
        }
        Ok(captures)
    }

    fn driven_signal(&self, name: &Spanned<String>) -> Res<usize> {
        self.by_signal
            .get(name.get_ref().trim())
            .copied()
            .ok_or_else(|| {
                self.err(
                    name.span(),
                    format!(
                        "signal \"{}\" is not driven by any launch or arc",
                        name.get_ref()
                    ),
                    "unknown signal",
                    Some(
                        "check the spelling, or add the [[arc]] or [[launch]] that drives it"
                            .into(),
                    ),
                )
            })
    }

    /// A capture's setup and hold: a part's check arcs or fixed times, never both.
    fn checks(&self, c: &RawCapture) -> Res<(Option<Delay>, Option<Delay>)> {
        match (&c.part, &c.check) {
            (Some(p), Some(check)) => {
                if c.setup.is_some() || c.hold.is_some() {
                    return Err(self.err(
                        check.span(),
                        "a capture takes either part + check or fixed setup/hold times, not both",
                        "both given",
                        None,
                    ));
                }
                let instance = self.instance(p)?;
                let s = self.part_arc(instance, check, ArcKind::Setup)?;
                let part = &self.lib.parts[self.instances[instance].part];
                let h = part.arc(check.get_ref(), ArcKind::Hold);
                let at = |arc| Delay::Part {
                    instance,
                    arc,
                    scale: 1.0,
                    min_ns: None,
                };
                Ok((Some(at(s)), h.map(at)))
            }
            (None, None) => {
                let setup = self.fixed_check(c, &c.setup, "setup")?;
                if setup.is_none() {
                    return Err(self.err(
                        c.signal.span(),
                        "capture has no setup requirement",
                        "this capture",
                        Some(
                            "give part = \"U…\" and check = \"D->CLK\", or setup = \"10 ns\""
                                .into(),
                        ),
                    ));
                }
                Ok((setup, self.fixed_check(c, &c.hold, "hold")?))
            }
            (Some(p), None) => Err(self.err(
                p.span(),
                "capture names a part but not its check",
                "part without check",
                Some("add check = \"D->CLK\" (the name of the part's setup/hold arcs)".into()),
            )),
            (None, Some(ch)) => Err(self.err(
                ch.span(),
                "capture names a check but not the part",
                "check without part",
                Some("add part = \"U…\"".into()),
            )),
        }
    }

    /// A fixed setup or hold time of a capture, the same at every corner.
    fn fixed_check(
        &self,
        c: &RawCapture,
        v: &Option<Spanned<String>>,
        what: &str,
    ) -> Res<Option<Delay>> {
        let who = c.name.clone().unwrap_or_else(|| c.signal.get_ref().clone());
        v.as_ref()
            .map(|s| {
                self.time(s).map(|ns| Delay::Fixed {
                    min_ns: Some(ns),
                    typ_ns: Some(ns),
                    max_ns: ns,
                    label: format!("fixed {what} of {who}"),
                })
            })
            .transpose()
    }
}

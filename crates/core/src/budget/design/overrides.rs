//! Local overrides of library values: a part arc replaced by fixed values or scaled, wherever
//! the design uses it.

use super::load::{Loader, Res};
use super::model::{Capture, Delay, GraphArc, Launch};
use super::raw::RawOverride;
use crate::budget::library::model::ArcKind;

impl Loader<'_> {
    /// Apply every `[[override]]` in file order to launches, arcs and captures.
    pub fn apply_overrides(
        &self,
        raw: &[RawOverride],
        launches: &mut [Launch],
        arcs: &mut [GraphArc],
        captures: &mut [Capture],
    ) -> Res<()> {
        for o in raw {
            let instance = self.instance(&o.part)?;
            let kind = o.kind.unwrap_or(ArcKind::Delay);
            let arc = self.part_arc(instance, &o.arc, kind)?;
            let replacement = self.replacement(o, instance, arc)?;
            let mut replace = |d: &mut Delay| {
                if matches!(d, Delay::Part { instance: i, arc: a, .. } if *i == instance && *a == arc)
                {
                    *d = replacement.clone();
                }
            };
            for l in launches.iter_mut() {
                replace(&mut l.delay);
                l.clock_via.iter_mut().for_each(&mut replace);
            }
            for a in arcs.iter_mut() {
                replace(&mut a.delay);
            }
            for c in captures.iter_mut() {
                c.clock_via.iter_mut().for_each(&mut replace);
                c.setup
                    .iter_mut()
                    .chain(c.hold.iter_mut())
                    .for_each(&mut replace);
            }
        }
        Ok(())
    }

    /// What an override puts in place of the arc: fixed values, or the library arc scaled
    /// and/or given a guaranteed minimum (its maximum still derated).
    fn replacement(&self, o: &RawOverride, instance: usize, arc: usize) -> Res<Delay> {
        let kind = self.lib.parts[self.instances[instance].part].arcs[arc].kind;
        if kind.is_clock_limit() {
            return Err(self.err(
                o.arc.span(),
                "overrides change delays, setup and hold times; pulse widths and f_max are not overridden",
                "here",
                Some("give the part's own limits in a --parts folder instead".into()),
            ));
        }
        match (&o.max, &o.scale) {
            (Some(max), None) => Ok(Delay::Fixed {
                max_ns: self.time(max)?,
                min_ns: self.time_opt(&o.min)?,
                typ_ns: self.time_opt(&o.typ)?,
                label: format!("override of {} {}", o.part.get_ref(), o.arc.get_ref()),
            }),
            (None, scale) if scale.is_some() || o.min.is_some() => {
                let s = match scale {
                    Some(scale) => {
                        let s = *scale.get_ref();
                        if !(s.is_finite() && s > 0.0) {
                            return Err(self.err(
                                scale.span(),
                                "scale must be a positive number",
                                "here",
                                None,
                            ));
                        }
                        s
                    }
                    None => 1.0,
                };
                if let Some(t) = &o.typ {
                    return Err(self.err(
                        t.span(),
                        "typ takes fixed values (with max); with scale or min alone the library's typical is kept",
                        "here",
                        None,
                    ));
                }
                Ok(Delay::Part {
                    instance,
                    arc,
                    scale: s,
                    min_ns: self.time_opt(&o.min)?,
                })
            }
            (Some(max), Some(_)) => Err(self.err(
                max.span(),
                "an override takes either fixed values (min/typ/max) or a scale, not both",
                "both given",
                None,
            )),
            _ => Err(self.err(
                o.part.span(),
                "override changes nothing",
                "this override",
                Some(
                    "add max = \"12 ns\" (with optional min/typ), scale = 1.2, or min = \"2 ns\" alone to keep the derated maximum"
                        .into(),
                ),
            )),
        }
    }
}

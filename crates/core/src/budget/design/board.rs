//! Resolving the board: operating point, planned clock, sections and part instances.

use super::load::{Loader, Res};
use super::model::{ClockPlan, Instance, Operating, Section};
use super::raw::{PartDecl, RawClock, RawOperating, RawSection};
use crate::budget::derate::Corner;
use crate::units;

impl Loader<'_> {
    /// The operating point (5 V, 25 °C, max corner where the file says nothing).
    pub fn operating(&self, o: Option<&RawOperating>) -> Res<Operating> {
        let vcc_v = match o.and_then(|o| o.vcc.as_ref()) {
            Some(s) => {
                let v = self.quantity(s, units::parse_voltage_v, "not a voltage")?;
                if v > 0.0 {
                    v
                } else {
                    return Err(self.err(
                        s.span(),
                        "supply voltage must be positive",
                        "here",
                        None,
                    ));
                }
            }
            None => 5.0,
        };
        let temp_c = match o.and_then(|o| o.temp.as_ref()) {
            Some(t) => self.temperature(t)?,
            None => 25.0,
        };
        Ok(Operating {
            vcc_v,
            temp_c,
            corner: o.and_then(|o| o.corner).unwrap_or(Corner::Max),
            common_clock_credit: o.and_then(|o| o.common_clock_credit).unwrap_or(false),
        })
    }

    /// The planned clock and the master clock's name ("CLK" unless named).
    pub fn clock(&self, c: Option<&RawClock>) -> Res<(ClockPlan, String)> {
        let mut clock = ClockPlan::default();
        let Some(c) = c else {
            return Ok((clock, "CLK".to_string()));
        };
        if let Some(f) = &c.freq {
            let hz = self.quantity(f, units::parse_freq_hz, "not a frequency")?;
            if hz <= 0.0 {
                return Err(self.err(f.span(), "clock frequency must be positive", "here", None));
            }
            clock.freq_hz = Some(hz);
        }
        if let Some(d) = &c.duty {
            clock.duty = Some(self.duty(d)?);
        }
        Ok((clock, c.name.clone().unwrap_or_else(|| "CLK".to_string())))
    }

    /// Board sections, each name once.
    pub fn sections(&self, raw: &[RawSection]) -> Res<Vec<Section>> {
        let mut sections: Vec<Section> = Vec::new();
        for s in raw {
            if sections.iter().any(|x| x.name == *s.name.get_ref()) {
                return Err(self.err(
                    s.name.span(),
                    format!("section \"{}\" is declared twice", s.name.get_ref()),
                    "second declaration",
                    Some("give each [[section]] a unique name".into()),
                ));
            }
            sections.push(Section {
                name: s.name.get_ref().clone(),
                rail: s.rail.clone(),
            });
        }
        Ok(sections)
    }

    /// Declare every part instance: a unique reference, a library type, its section and load.
    pub fn instances(&mut self, raw: &[PartDecl], sections: &[Section]) -> Res<()> {
        for p in raw {
            let reference = self.reference(p)?;
            let part = self.part_type(p)?;
            let section = match &p.section {
                Some(s) => Some(self.section(s, sections)?),
                None => None,
            };
            let load_pf = match &p.load {
                Some(l) => {
                    let v = self.quantity(l, units::parse_capacitance_pf, "not a capacitance")?;
                    if v < 0.0 {
                        return Err(self.err(l.span(), "load must not be negative", "here", None));
                    }
                    Some(v)
                }
                None => None,
            };
            self.by_ref.insert(reference.clone(), self.instances.len());
            self.instances.push(Instance {
                reference,
                part,
                section,
                load_pf,
            });
        }
        Ok(())
    }

    fn reference(&self, p: &PartDecl) -> Res<String> {
        let reference = p.reference.get_ref().trim().to_string();
        if reference.is_empty() {
            return Err(self.err(
                p.reference.span(),
                "empty part reference",
                "here",
                Some("use a designator such as \"U12\"".into()),
            ));
        }
        if self.by_ref.contains_key(&reference) {
            return Err(self.err(
                p.reference.span(),
                format!("part reference \"{reference}\" is used twice"),
                "duplicate",
                Some("each [[part]] needs its own reference designator".into()),
            ));
        }
        Ok(reference)
    }

    fn part_type(&self, p: &PartDecl) -> Res<usize> {
        self.lib.part_index(p.type_name.get_ref()).ok_or_else(|| {
            let similar = self.lib.similar_parts(p.type_name.get_ref());
            self.err(
                p.type_name.span(),
                format!("unknown part type \"{}\"", p.type_name.get_ref()),
                "not in the part library",
                Some(if similar.is_empty() {
                    "list the library with `slackmeter parts`, or add the part in a --parts folder"
                        .into()
                } else {
                    format!("similar parts in the library: {}", similar.join(", "))
                }),
            )
        })
    }

    fn section(&self, s: &toml::Spanned<String>, sections: &[Section]) -> Res<usize> {
        sections
            .iter()
            .position(|x| x.name == *s.get_ref())
            .ok_or_else(|| {
                let names: Vec<&str> = sections.iter().map(|x| x.name.as_str()).collect();
                self.err(
                    s.span(),
                    format!("no section \"{}\" in this design", s.get_ref()),
                    "unknown section",
                    Some(format!(
                        "declare it with [[section]] name = \"{}\"; sections here: {}",
                        s.get_ref(),
                        names.join(", ")
                    )),
                )
            })
    }
}

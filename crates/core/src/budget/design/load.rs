//! The loader's shared state and its checked look-ups: quantities, part instances, arcs and
//! signals by name, each failure located in the file with a hint.

use std::collections::HashMap;
use std::ops::Range;

use toml::Spanned;

use super::files::Files;
use super::model::{Delay, Instance};
use super::raw::{RawFixed, ViaEntry};
use crate::budget::library::model::{ArcKind, Library};
use crate::diag::SourceError;
use crate::units::{self, UnitError};

pub(super) type Res<T> = Result<T, Box<SourceError>>;

/// What resolving a design has found so far: instances and signals by name.
pub(super) struct Loader<'a> {
    /// The files the design is read from (errors point into the one a span falls in).
    pub files: &'a Files,
    pub lib: &'a Library,
    pub instances: Vec<Instance>,
    pub by_ref: HashMap<String, usize>,
    pub signals: Vec<String>,
    pub by_signal: HashMap<String, usize>,
}

impl<'a> Loader<'a> {
    pub fn new(files: &'a Files, lib: &'a Library) -> Loader<'a> {
        Loader {
            files,
            lib,
            instances: Vec::new(),
            by_ref: HashMap::new(),
            signals: Vec::new(),
            by_signal: HashMap::new(),
        }
    }

    /// An error at `span` of the design file.
    pub fn err(
        &self,
        span: Range<usize>,
        msg: impl Into<String>,
        label: &str,
        help: Option<String>,
    ) -> Box<SourceError> {
        Box::new(self.files.error(span, msg, label, help))
    }

    /// A quantity with an SI unit; `what` labels the span when it does not parse.
    pub fn quantity(
        &self,
        s: &Spanned<String>,
        parse: fn(&str) -> Result<f64, UnitError>,
        what: &str,
    ) -> Res<f64> {
        parse(s.get_ref())
            .map_err(|e| self.err(s.span(), e.to_string(), what, Some(units::HELP.into())))
    }

    /// A time, ≥ 0.
    pub fn time(&self, s: &Spanned<String>) -> Res<f64> {
        let v = self.quantity(s, units::parse_time_ns, "not a time")?;
        if v < 0.0 {
            return Err(self.err(
                s.span(),
                format!("time \"{}\" is negative", s.get_ref()),
                "here",
                Some("delays and setup/hold times are ≥ 0".into()),
            ));
        }
        Ok(v)
    }

    /// An optional time.
    pub fn time_opt(&self, s: &Option<Spanned<String>>) -> Res<Option<f64>> {
        s.as_ref().map(|t| self.time(t)).transpose()
    }

    /// A temperature: a number of °C or a string with its unit.
    pub fn temperature(&self, v: &Spanned<toml::Value>) -> Res<f64> {
        match v.get_ref() {
            toml::Value::Integer(i) => Ok(*i as f64),
            toml::Value::Float(f) if f.is_finite() => Ok(*f),
            toml::Value::String(s) => units::parse_temp_c(s).map_err(|e| {
                self.err(
                    v.span(),
                    e.to_string(),
                    "not a temperature",
                    Some(units::HELP.into()),
                )
            }),
            _ => Err(self.err(
                v.span(),
                "temperature must be a number of °C or a string like \"85 °C\"",
                "here",
                None,
            )),
        }
    }

    /// A duty cycle: a fraction or a percentage, as a number or a string.
    pub fn duty(&self, v: &Spanned<toml::Value>) -> Res<f64> {
        let text = match v.get_ref() {
            toml::Value::Float(f) => f.to_string(),
            toml::Value::Integer(i) => i.to_string(),
            toml::Value::String(s) => s.clone(),
            _ => String::new(),
        };
        units::parse_duty(&text).map_err(|e| {
            self.err(
                v.span(),
                e.to_string(),
                "not a duty cycle",
                Some(units::HELP.into()),
            )
        })
    }

    /// A declared part instance by reference designator.
    pub fn instance(&self, name: &Spanned<String>) -> Res<usize> {
        self.by_ref.get(name.get_ref()).copied().ok_or_else(|| {
            let mut known: Vec<&str> = self.by_ref.keys().map(String::as_str).collect();
            known.sort_unstable();
            known.truncate(12);
            self.err(
                name.span(),
                format!("no part instance \"{}\" in this design", name.get_ref()),
                "unknown reference",
                Some(format!(
                    "declare it with [[part]] ref = \"{}\" type = \"…\"; instances here: {}",
                    name.get_ref(),
                    known.join(", ")
                )),
            )
        })
    }

    /// An arc of one kind of an instance's part, by name.
    pub fn part_arc(&self, inst: usize, arc: &Spanned<String>, kind: ArcKind) -> Res<usize> {
        let part = &self.lib.parts[self.instances[inst].part];
        if let Some(i) = part.arc(arc.get_ref(), kind) {
            return Ok(i);
        }
        let other = [ArcKind::Delay, ArcKind::Setup, ArcKind::Hold]
            .into_iter()
            .find(|k| *k != kind && part.arc(arc.get_ref(), *k).is_some());
        let msg = match other {
            Some(k) => format!(
                "arc \"{}\" of {} is a {k:?} arc, not a {kind:?} arc",
                arc.get_ref(),
                part.type_name
            ),
            None => format!("part {} has no arc \"{}\"", part.type_name, arc.get_ref()),
        };
        let names = part.arc_names(kind);
        Err(self.err(
            arc.span(),
            msg,
            "unknown arc",
            Some(format!(
                "{kind:?} arcs of {}: {}",
                part.type_name,
                if names.is_empty() {
                    "none".to_string()
                } else {
                    names.join(", ")
                }
            )),
        ))
    }

    /// The delay arc `arc` of instance `part`, unscaled.
    pub fn part_delay(&self, part: &Spanned<String>, arc: &Spanned<String>) -> Res<Delay> {
        let instance = self.instance(part)?;
        let arc = self.part_arc(instance, arc, ArcKind::Delay)?;
        Ok(Delay::Part {
            instance,
            arc,
            scale: 1.0,
            min_ns: None,
        })
    }

    /// The clock buffers on a launch or capture clock.
    pub fn via(&self, list: &[toml::Spanned<ViaEntry>]) -> Res<Vec<Delay>> {
        list.iter()
            .map(|v| match v.get_ref() {
                ViaEntry::Table(t) => self.part_delay(&t.part, &t.arc),
                // the expansion writes every short form as a table
                ViaEntry::Short(s) => Err(self.err(
                    v.span(),
                    format!("clock buffer \"{s}\" was not read"),
                    "here",
                    Some("write it as { part = \"U30\", arc = \"A->Y\" }".into()),
                )),
            })
            .collect()
    }

    /// A signal by name, declared on first use.
    pub fn signal(&mut self, name: &Spanned<String>) -> Res<usize> {
        let n = name.get_ref().trim();
        if n.is_empty() {
            return Err(self.err(name.span(), "empty signal name", "here", None));
        }
        if let Some(&i) = self.by_signal.get(n) {
            return Ok(i);
        }
        self.signals.push(n.to_string());
        self.by_signal.insert(n.to_string(), self.signals.len() - 1);
        Ok(self.signals.len() - 1)
    }

    /// A fixed delay table, min ≤ typ ≤ max.
    pub fn fixed(&self, f: &Spanned<RawFixed>, label: String) -> Res<Delay> {
        let raw = f.get_ref();
        let max = self.time(&raw.max)?;
        let min = self.time_opt(&raw.min)?;
        let typ = self.time_opt(&raw.typ)?;
        let ordered = min.is_none_or(|m| m <= typ.unwrap_or(max)) && typ.is_none_or(|t| t <= max);
        if !ordered {
            return Err(self.err(
                f.span(),
                "fixed delay must satisfy min ≤ typ ≤ max",
                "out of order",
                Some("swap the values or drop the one you do not know".into()),
            ));
        }
        Ok(Delay::Fixed {
            min_ns: min,
            typ_ns: typ,
            max_ns: max,
            label,
        })
    }
}

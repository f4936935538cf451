//! The supply wiring of a design file: `[supply]`, `[[feed]]`, `[[led]]` and `[[load]]`, read
//! from the design's own text and checked against its sections with file:line:column.

use std::ops::Range;

use serde::Deserialize;
use toml::Spanned;

use super::copper;
use crate::budget::Design;
use crate::diag::SourceError;
use crate::units::{self, UnitError};

/// Resistance of one breadboard or connector contact when the design gives none, Ω (common
/// practice, no source: a clean breadboard contact is tens of milliohms).
pub const DEFAULT_CONTACT_OHM: f64 = 0.02;
/// Share of the time a bus or register LED is lit when the design says nothing (common practice,
/// no source: data bits are high half of the time).
pub const DEFAULT_LED_LIT: f64 = 0.5;

/// The supply and its wiring to each section.
#[derive(Clone, Debug, PartialEq)]
pub struct Wiring {
    /// Voltage at the supply's terminals.
    pub supply_v: f64,
    /// The supply's current limit, if given.
    pub limit_ma: Option<f64>,
    /// Resistance per contact.
    pub contact_ohm: f64,
    /// Temperature of the wiring (the design's operating temperature unless given).
    pub wire_temp_c: f64,
    /// Whether HCT inputs sit at TTL levels (driven by LS outputs); None: decide from the parts.
    pub hct_inputs_at_ttl: Option<bool>,
    /// The feeds, one per section at most.
    pub feeds: Vec<Feed>,
    /// LED groups.
    pub leds: Vec<Leds>,
    /// Other loads.
    pub loads: Vec<Load>,
}

/// Where a feed starts.
#[derive(Clone, Debug, PartialEq)]
pub enum FedFrom {
    /// The supply's terminals.
    Supply,
    /// Another section's rail (index into the design's sections).
    Section(usize),
}

/// The wire from the supply (or another section) to one section.
#[derive(Clone, Debug, PartialEq)]
pub struct Feed {
    /// Section fed (index into the design's sections).
    pub section: usize,
    /// Where the wire starts.
    pub from: FedFrom,
    /// Wire gauge (AWG).
    pub gauge: i32,
    /// Length of the run (one way).
    pub length_m: f64,
    /// Conductors in the loop: 2 when the ground return is the same wire again.
    pub conductors: u32,
    /// Breadboard or connector contacts in the loop.
    pub contacts: u32,
}

impl Feed {
    /// The loop resistance: the copper (per conductor) and the contacts.
    pub fn ohm(&self, wiring: &Wiring) -> f64 {
        copper::ohm_per_m(self.gauge, wiring.wire_temp_c)
            * self.length_m
            * f64::from(self.conductors)
            + wiring.contact_ohm * f64::from(self.contacts)
    }
}

/// A group of LEDs with series resistors on one section.
#[derive(Clone, Debug, PartialEq)]
pub struct Leds {
    /// Section (index).
    pub section: usize,
    /// How many.
    pub count: u32,
    /// Forward voltage.
    pub vf_v: f64,
    /// Series resistor of each.
    pub resistor_ohm: f64,
    /// Share of the time each is lit.
    pub lit: f64,
}

impl Leds {
    /// Current of the group at a rail voltage (none when the rail is below the forward voltage).
    pub fn ma(&self, rail_v: f64) -> f64 {
        f64::from(self.count) * self.lit * ((rail_v - self.vf_v).max(0.0) / self.resistor_ohm) * 1e3
    }
}

/// Any other fixed load on a section (an oscillator, a display).
#[derive(Clone, Debug, PartialEq)]
pub struct Load {
    /// Section (index).
    pub section: usize,
    /// What it is.
    pub name: String,
    /// Its current.
    pub current_ma: f64,
}

#[derive(Deserialize)]
struct RawWiring {
    supply: Option<Spanned<RawSupply>>,
    #[serde(default)]
    feed: Vec<Spanned<RawFeed>>,
    #[serde(default)]
    led: Vec<Spanned<RawLed>>,
    #[serde(default)]
    load: Vec<Spanned<RawLoad>>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawSupply {
    voltage: Spanned<String>,
    limit: Option<Spanned<String>>,
    contact: Option<Spanned<String>>,
    wire_temp: Option<Spanned<String>>,
    hct_inputs_at_ttl: Option<bool>,
    #[allow(dead_code)]
    notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawFeed {
    section: Spanned<String>,
    from: Option<Spanned<String>>,
    gauge: Spanned<String>,
    length: Spanned<String>,
    conductors: Option<Spanned<i64>>,
    contacts: Option<Spanned<i64>>,
    #[allow(dead_code)]
    notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLed {
    section: Spanned<String>,
    count: Spanned<i64>,
    vf: Option<Spanned<String>>,
    resistor: Option<Spanned<String>>,
    lit: Option<Spanned<f64>>,
    #[allow(dead_code)]
    notes: Option<String>,
}

#[derive(Deserialize)]
#[serde(deny_unknown_fields)]
struct RawLoad {
    section: Spanned<String>,
    name: String,
    current: Spanned<String>,
}

type Res<T> = Result<T, Box<SourceError>>;

struct Reader<'a> {
    design: &'a Design,
}

impl Reader<'_> {
    fn err(&self, span: Range<usize>, msg: impl Into<String>, help: &str) -> Box<SourceError> {
        self.design
            .source
            .fail(span, msg, "here", Some(help.to_string()))
    }

    fn quantity(&self, s: &Spanned<String>, parse: fn(&str) -> Result<f64, UnitError>) -> Res<f64> {
        parse(s.get_ref()).map_err(|e| self.err(s.span(), e.to_string(), units::HELP))
    }

    fn positive(
        &self,
        s: &Spanned<String>,
        parse: fn(&str) -> Result<f64, UnitError>,
        what: &str,
    ) -> Res<f64> {
        let v = self.quantity(s, parse)?;
        if v > 0.0 {
            Ok(v)
        } else {
            Err(self.err(
                s.span(),
                format!("{what} must be positive"),
                "give a value above zero",
            ))
        }
    }

    fn count(&self, s: &Spanned<i64>, what: &str) -> Res<u32> {
        u32::try_from(*s.get_ref()).map_err(|_| {
            self.err(
                s.span(),
                format!("{what} must be a whole number ≥ 0"),
                "e.g. 4",
            )
        })
    }

    fn section(&self, s: &Spanned<String>) -> Res<usize> {
        self.design
            .sections
            .iter()
            .position(|x| x.name == *s.get_ref())
            .ok_or_else(|| {
                let names: Vec<&str> = self
                    .design
                    .sections
                    .iter()
                    .map(|x| x.name.as_str())
                    .collect();
                self.err(
                    s.span(),
                    format!("no section \"{}\" in this design", s.get_ref()),
                    &format!("sections here: {}", names.join(", ")),
                )
            })
    }

    fn feed(&self, raw: &Spanned<RawFeed>) -> Res<Feed> {
        let f = raw.get_ref();
        let section = self.section(&f.section)?;
        let from = match &f.from {
            None => FedFrom::Supply,
            Some(s) if s.get_ref() == "supply" => FedFrom::Supply,
            Some(s) => FedFrom::Section(self.section(s)?),
        };
        let gauge = copper::parse_gauge(f.gauge.get_ref()).ok_or_else(|| {
            self.err(
                f.gauge.span(),
                format!("unknown wire gauge \"{}\"", f.gauge.get_ref()),
                "write an American Wire Gauge from 0 to 40, e.g. \"22 AWG\"",
            )
        })?;
        let length_m = self.quantity(&f.length, units::parse_length_m)?;
        if length_m < 0.0 {
            return Err(self.err(
                f.length.span(),
                format!("wire length \"{}\" is negative", f.length.get_ref()),
                "a length is ≥ 0, e.g. \"0.6 m\"",
            ));
        }
        let conductors = match &f.conductors {
            Some(c) => {
                let n = self.count(c, "conductors")?;
                if !(1..=2).contains(&n) {
                    return Err(self.err(
                        c.span(),
                        "conductors must be 1 (the return is elsewhere) or 2 (supply and return)",
                        "the default is 2",
                    ));
                }
                n
            }
            None => 2,
        };
        let contacts = f
            .contacts
            .as_ref()
            .map(|c| self.count(c, "contacts"))
            .transpose()?
            .unwrap_or(0);
        Ok(Feed {
            section,
            from,
            gauge,
            length_m,
            conductors,
            contacts,
        })
    }

    fn led(&self, raw: &Spanned<RawLed>) -> Res<Leds> {
        let l = raw.get_ref();
        let section = self.section(&l.section)?;
        let count = self.count(&l.count, "count")?;
        let Some(r) = &l.resistor else {
            return Err(self.err(
                raw.span(),
                "an [[led]] group has no series resistor",
                "give each LED's resistor, e.g. resistor = \"1 kΩ\" (an LED straight across the rail is not a load the budget can hold)",
            ));
        };
        let resistor_ohm = self.positive(r, units::parse_resistance_ohm, "resistor")?;
        let vf_v = match &l.vf {
            Some(v) => self.positive(v, units::parse_voltage_v, "forward voltage")?,
            None => 2.0,
        };
        let lit = match &l.lit {
            Some(x) if (0.0..=1.0).contains(x.get_ref()) => *x.get_ref(),
            Some(x) => {
                return Err(self.err(x.span(), "lit must be a share between 0 and 1", "e.g. 0.5"));
            }
            None => DEFAULT_LED_LIT,
        };
        Ok(Leds {
            section,
            count,
            vf_v,
            resistor_ohm,
            lit,
        })
    }
}

impl Wiring {
    /// The supply wiring written in a design file; None when it has no `[supply]` table.
    pub fn of(design: &Design) -> Res<Option<Wiring>> {
        let raw: RawWiring = toml::from_str(&design.source.text)
            .map_err(|e| Box::new(design.source.toml_error(&e)))?;
        let rd = Reader { design };
        let Some(supply) = &raw.supply else {
            if let Some(f) = raw.feed.first() {
                return Err(rd.err(
                    f.span(),
                    "[[feed]] without a [supply] table",
                    "add [supply] with voltage = \"5.0 V\" (and limit = \"1 A\")",
                ));
            }
            return Ok(None);
        };
        let s = supply.get_ref();
        let supply_v = rd.positive(&s.voltage, units::parse_voltage_v, "supply voltage")?;
        let limit_ma = s
            .limit
            .as_ref()
            .map(|l| rd.positive(l, units::parse_current_ma, "current limit"))
            .transpose()?;
        let contact_ohm = match &s.contact {
            Some(c) => {
                let v = rd.quantity(c, units::parse_resistance_ohm)?;
                if v < 0.0 {
                    return Err(rd.err(
                        c.span(),
                        "contact resistance is negative",
                        "e.g. \"20 mΩ\"",
                    ));
                }
                v
            }
            None => DEFAULT_CONTACT_OHM,
        };
        let wire_temp_c = match &s.wire_temp {
            Some(t) => units::parse_temp_c(t.get_ref())
                .map_err(|e| rd.err(t.span(), e.to_string(), units::HELP))?,
            None => design.operating.temp_c,
        };
        let mut feeds: Vec<Feed> = Vec::new();
        for f in &raw.feed {
            let feed = rd.feed(f)?;
            if feeds.iter().any(|x| x.section == feed.section) {
                return Err(rd.err(
                    f.get_ref().section.span(),
                    format!("section \"{}\" is fed twice", f.get_ref().section.get_ref()),
                    "give each section one [[feed]]",
                ));
            }
            if feed.from == FedFrom::Section(feed.section) {
                return Err(rd.err(
                    f.get_ref().section.span(),
                    "a section cannot be fed from itself",
                    "feed it from \"supply\" or from the section before it",
                ));
            }
            feeds.push(feed);
        }
        // every chain of feeds must reach the supply
        for (i, f) in feeds.iter().enumerate() {
            let mut at = f.from.clone();
            let mut steps = 0;
            while let FedFrom::Section(s) = at {
                steps += 1;
                let parent = feeds.iter().find(|x| x.section == s);
                match parent {
                    Some(p) if steps <= feeds.len() => at = p.from.clone(),
                    Some(_) => {
                        return Err(rd.err(
                            raw.feed[i].span(),
                            "the feeds form a loop: no chain from this section reaches the supply",
                            "feed one of these sections from \"supply\"",
                        ));
                    }
                    None => {
                        return Err(rd.err(
                            raw.feed[i]
                                .get_ref()
                                .from
                                .as_ref()
                                .map_or(raw.feed[i].span(), |s| s.span()),
                            format!(
                                "section \"{}\" has no [[feed]] of its own to feed from",
                                design.sections[s].name
                            ),
                            "give that section a [[feed]] too, or feed this one from \"supply\"",
                        ));
                    }
                }
            }
        }
        let leds = raw.led.iter().map(|l| rd.led(l)).collect::<Res<Vec<_>>>()?;
        let mut loads = Vec::new();
        for l in &raw.load {
            let l = l.get_ref();
            let section = rd.section(&l.section)?;
            let current_ma = rd.quantity(&l.current, units::parse_current_ma)?;
            if current_ma < 0.0 {
                return Err(rd.err(
                    l.current.span(),
                    "a load's current is negative",
                    "e.g. \"15 mA\"",
                ));
            }
            loads.push(Load {
                section,
                name: l.name.clone(),
                current_ma,
            });
        }
        Ok(Some(Wiring {
            supply_v,
            limit_ma,
            contact_ohm,
            wire_temp_c,
            hct_inputs_at_ttl: s.hct_inputs_at_ttl,
            feeds,
            leds,
            loads,
        }))
    }
}

//! The power budget of a design: each section's current at its own rail, the drop along each
//! feed, the rails (a fixed point: the currents depend on the rails they set), the supply's
//! headroom, warnings and decoupling guidance; and the clock fixed point for the timing budget.

use serde::Serialize;

use super::current::{self, Conditions, PartCurrent};
use super::data::{DrawKind, SupplyData};
use super::wiring::{FedFrom, Wiring};
use crate::budget::{Design, Library};

/// Largest number of rail iterations before giving up (each one contracts by the feed resistance
/// times dI/dV, far below 1 on any bench wiring).
pub const MAX_ITERATIONS: u32 = 100;
/// Rails agree to this between two iterations when the fixed point is reached, V.
pub const TOLERANCE_V: f64 = 1e-9;
/// Ceramic capacitor per chip at its supply pins (common practice, no source).
pub const DECOUPLING_PER_CHIP_NF: f64 = 100.0;
/// Bulk capacitor where each feed enters its section (common practice, no source).
pub const BULK_PER_SECTION_UF: f64 = 10.0;

/// What the power budget is computed for.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct PowerPoint {
    /// Clock frequency.
    pub freq_hz: f64,
    /// Data-signal activity (share of the clock frequency).
    pub data_activity: f64,
    /// Ambient temperature.
    pub temp_c: f64,
}

/// One section's figures.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct SectionPower {
    /// Section name.
    pub name: String,
    /// Probe rail label, if any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub rail: Option<String>,
    /// What feeds it ("supply" or a section's name); None when it has no feed.
    pub fed_from: Option<String>,
    /// Chips on it.
    pub chips: usize,
    /// Its own current: static + dynamic + LEDs + other loads.
    pub current_ma: f64,
    /// Quiescent, LS package and memory current.
    pub static_ma: f64,
    /// CMOS switching current.
    pub dynamic_ma: f64,
    /// LED current.
    pub led_ma: f64,
    /// Other loads.
    pub other_ma: f64,
    /// Current through its feed (its own and every section fed through it).
    pub feed_ma: f64,
    /// Loop resistance of its feed.
    pub feed_ohm: f64,
    /// Drop along its feed.
    pub drop_mv: f64,
    /// Predicted rail.
    pub rail_v: f64,
    /// The highest rated minimum supply among its parts' families.
    pub rated_min_v: f64,
    /// Decoupling: 100 nF per chip and bulk at the feed (common practice, no source).
    pub decoupling: String,
}

/// The whole power budget.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct PowerBudget {
    /// Design name.
    pub design: String,
    /// Supply voltage.
    pub supply_v: f64,
    /// Clock the dynamic current is computed at.
    pub freq_hz: f64,
    /// Data activity used.
    pub data_activity: f64,
    /// Clock inputs toggle at the clock (activity 1).
    pub clock_activity: f64,
    /// Temperature.
    pub temp_c: f64,
    /// Contact resistance used.
    pub contact_ohm: f64,
    /// Sections in the order of the design.
    pub sections: Vec<SectionPower>,
    /// Current drawn from the supply.
    pub total_ma: f64,
    /// Supply limit.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub supply_limit_ma: Option<f64>,
    /// Limit minus load (negative: overloaded).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub supply_headroom_ma: Option<f64>,
    /// Iterations of the rail fixed point.
    pub iterations: u32,
    /// Problems and caveats, one sentence each.
    pub warnings: Vec<String>,
}

/// Each instance's current at a rail, once per section.
fn section_currents(
    design: &Design,
    lib: &Library,
    data: &SupplyData,
    pt: &PowerPoint,
    hct_ttl: bool,
    rails_v: &[f64],
) -> Vec<(f64, f64, bool)> {
    let mut out = vec![(0.0, 0.0, false); design.sections.len()];
    for (i, inst) in design.instances.iter().enumerate() {
        let Some(s) = inst.section else { continue };
        let part = &lib.parts[inst.part];
        let Some(d) = data.of(lib, part) else {
            continue;
        };
        let clocked = design.clocked.iter().any(|c| c.instance == i);
        let c = Conditions {
            rail_v: rails_v[s],
            freq_hz: pt.freq_hz,
            data_activity: pt.data_activity,
            temp_c: pt.temp_c,
            hct_inputs_at_ttl: hct_ttl && lib.families[part.family].name.contains("HCT"),
        };
        let p: PartCurrent = current::part_current(
            &d,
            clocked,
            inst.load_pf.unwrap_or(current::DEFAULT_LOAD_PF),
            &c,
        );
        out[s].0 += p.static_ma;
        out[s].1 += p.dynamic_ma;
        out[s].2 |= p.beyond_columns;
    }
    out
}

/// Solve the power budget: rails from the supply through the feeds, currents at those rails,
/// repeated until the rails agree to [`TOLERANCE_V`].
pub fn solve(
    design: &Design,
    lib: &Library,
    data: &SupplyData,
    wiring: &Wiring,
    pt: &PowerPoint,
) -> PowerBudget {
    let n = design.sections.len();
    let mut warnings = Vec::new();
    let hct_ttl = wiring.hct_inputs_at_ttl.unwrap_or_else(|| {
        design
            .instances
            .iter()
            .any(|i| lib.families[lib.parts[i.part].family].name == "74LS")
    });
    // feeds in an order where each comes after the one it is fed from
    let mut order: Vec<usize> = Vec::new();
    while order.len() < wiring.feeds.len() {
        let before = order.len();
        for (k, f) in wiring.feeds.iter().enumerate() {
            let ready = match f.from {
                FedFrom::Supply => true,
                FedFrom::Section(s) => order.iter().any(|&j| wiring.feeds[j].section == s),
            };
            if ready && !order.contains(&k) {
                order.push(k);
            }
        }
        if order.len() == before {
            break; // the loader refuses loops; never spin
        }
    }
    let feed_of = |s: usize| wiring.feeds.iter().position(|f| f.section == s);
    let ohm: Vec<f64> = wiring.feeds.iter().map(|f| f.ohm(wiring)).collect();
    let mut rails = vec![wiring.supply_v; n];
    let mut iterations = 0;
    let mut own = vec![0.0; n];
    // set on every pass; the loop runs at least once
    let mut parts;
    let mut leds: Vec<f64>;
    let mut feed_ma: Vec<f64>;
    loop {
        iterations += 1;
        parts = section_currents(design, lib, data, pt, hct_ttl, &rails);
        leds = vec![0.0; n];
        for l in &wiring.leds {
            leds[l.section] += l.ma(rails[l.section]);
        }
        for s in 0..n {
            let other: f64 = wiring
                .loads
                .iter()
                .filter(|l| l.section == s)
                .map(|l| l.current_ma)
                .fold(0.0, |a, b| a + b);
            own[s] = parts[s].0 + parts[s].1 + leds[s] + other;
        }
        // currents through each feed: its section's own and every feed hung from it
        feed_ma = own.clone();
        for &k in order.iter().rev() {
            let f = &wiring.feeds[k];
            if let FedFrom::Section(p) = f.from {
                feed_ma[p] += feed_ma[f.section];
            }
        }
        let mut next = vec![wiring.supply_v; n];
        for &k in &order {
            let f = &wiring.feeds[k];
            let start = match f.from {
                FedFrom::Supply => wiring.supply_v,
                FedFrom::Section(p) => next[p],
            };
            next[f.section] = start - feed_ma[f.section] * ohm[k] * 1e-3;
        }
        let change = next
            .iter()
            .zip(&rails)
            .map(|(a, b)| (a - b).abs())
            .fold(0.0, f64::max);
        rails = next;
        if change < TOLERANCE_V {
            break;
        }
        if iterations >= MAX_ITERATIONS {
            warnings.push(format!(
                "the rails did not settle in {MAX_ITERATIONS} iterations (last change {:.3} mV): the feeds are too thin for this load",
                change * 1e3
            ));
            break;
        }
    }
    let mut sections = Vec::with_capacity(n);
    for (s, sec) in design.sections.iter().enumerate() {
        let other: f64 = wiring
            .loads
            .iter()
            .filter(|l| l.section == s)
            .map(|l| l.current_ma)
            .fold(0.0, |a, b| a + b);
        let insts: Vec<usize> = (0..design.instances.len())
            .filter(|&i| design.instances[i].section == Some(s))
            .collect();
        let rated_min_v = insts
            .iter()
            .map(|&i| lib.families[lib.parts[design.instances[i].part].family].vcc_min_v)
            .fold(0.0, f64::max);
        let feed = feed_of(s);
        let fed_from = feed.map(|k| match wiring.feeds[k].from {
            FedFrom::Supply => "supply".to_string(),
            FedFrom::Section(p) => design.sections[p].name.clone(),
        });
        if feed.is_none() {
            warnings.push(format!(
                "section {}: no [[feed]]; its rail is taken as the supply's {:.2} V",
                sec.name, wiring.supply_v
            ));
        }
        let feed_ohm = feed.map_or(0.0, |k| ohm[k]);
        let drop_mv = feed.map_or(0.0, |_| feed_ma[s] * feed_ohm);
        if !insts.is_empty() && rails[s] < rated_min_v {
            warnings.push(format!(
                "section {}: the predicted rail {:.3} V is below {:.2} V, the rated minimum of its parts",
                sec.name, rails[s], rated_min_v
            ));
        }
        if parts[s].2 {
            warnings.push(format!(
                "section {}: {:.0} °C is beyond a part's quiescent-current columns; the widest column is used",
                sec.name, pt.temp_c
            ));
        }
        sections.push(SectionPower {
            name: sec.name.clone(),
            rail: sec.rail.clone(),
            fed_from,
            chips: insts.len(),
            current_ma: own[s],
            static_ma: parts[s].0,
            dynamic_ma: parts[s].1,
            led_ma: leds[s],
            other_ma: other,
            feed_ma: feed_ma[s],
            feed_ohm,
            drop_mv,
            rail_v: rails[s],
            rated_min_v,
            decoupling: format!(
                "{} × {:.0} nF at the chips' supply pins, {:.0} µF where the feed enters",
                insts.len(),
                DECOUPLING_PER_CHIP_NF,
                BULK_PER_SECTION_UF
            ),
        });
    }
    for inst in &design.instances {
        let part = &lib.parts[inst.part];
        match data.of(lib, part) {
            None => warnings.push(format!(
                "{} {}: no supply data for its family; its current is left out",
                inst.reference, part.type_name
            )),
            Some(d) if d.family_default => warnings.push(format!(
                "{} {}: no supply entry of its own; the {} family's defaults stand for it",
                inst.reference, part.type_name, lib.families[part.family].name
            )),
            Some(d) if d.kind == DrawKind::Memory && d.active_ma == 0.0 => warnings.push(format!(
                "{} {}: no active current in the supply data",
                inst.reference, part.type_name
            )),
            _ => {}
        }
        if inst.section.is_none() {
            warnings.push(format!(
                "{} {}: in no section; its current is left out",
                inst.reference, part.type_name
            ));
        }
    }
    let total_ma: f64 = (0..n)
        .filter(|&s| feed_of(s).is_none_or(|k| wiring.feeds[k].from == FedFrom::Supply))
        .map(|s| feed_ma[s])
        .sum();
    let supply_headroom_ma = wiring.limit_ma.map(|l| l - total_ma);
    if let Some(h) = supply_headroom_ma
        && h < 0.0
    {
        warnings.push(format!(
            "the load {total_ma:.0} mA is over the supply's limit by {:.0} mA",
            -h
        ));
    }
    PowerBudget {
        design: design.name.clone(),
        supply_v: wiring.supply_v,
        freq_hz: pt.freq_hz,
        data_activity: pt.data_activity,
        clock_activity: current::CLOCK_ACTIVITY,
        temp_c: pt.temp_c,
        contact_ohm: wiring.contact_ohm,
        sections,
        total_ma,
        supply_limit_ma: wiring.limit_ma,
        supply_headroom_ma,
        iterations,
        warnings,
    }
}

/// The clock fixed point: the rails depend on the clock (dynamic current), the clock the budget
/// allows depends on the rails. Starting at `start_hz`, `clock_at(rails)` gives the next clock;
/// stops when two clocks agree to 1 ppm. Returns the clock, the power budget at it and the
/// number of iterations (None for the clock when `clock_at` finds none).
pub fn clock_fixed_point(
    start_hz: f64,
    mut power_at: impl FnMut(f64) -> PowerBudget,
    mut clock_at: impl FnMut(&PowerBudget) -> Option<f64>,
) -> (Option<f64>, PowerBudget, u32) {
    let mut f = start_hz;
    let mut pb = power_at(f);
    for k in 1..=MAX_ITERATIONS {
        let Some(next) = clock_at(&pb).filter(|x| x.is_finite() && *x > 0.0) else {
            return (None, pb, k);
        };
        let settled = (next - f).abs() <= 1e-6 * f.abs().max(1.0);
        f = next;
        pb = power_at(f);
        if settled {
            return (Some(f), pb, k);
        }
    }
    (Some(f), pb, MAX_ITERATIONS)
}

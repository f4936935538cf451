//! From a netlist to a design in the compact syntax: each component matched to a library part,
//! its pins to the part's arcs (the library's pin maps), the clock followed from its net through
//! inverters and buffers to every clock pin, registers launching their outputs and capturing
//! their inputs, the other parts' arcs between the nets on their pins. What it cannot decide
//! becomes a TODO (written as a comment and returned); it never makes up a delay.

use std::collections::{BTreeMap, HashMap};

use super::netlist::Netlist;
use super::sections::{SectionRule, section_for};
use crate::budget::design::Edge;
use crate::budget::library::{ActiveEdge, ArcKind, Library, Part, Pin, PinRole};

/// What an import needs besides the netlist.
pub struct Options<'a> {
    /// The master clock's net name ("CLK" matches "/CLK" too).
    pub clock: &'a str,
    /// Component values the library does not know, mapped to library types.
    pub map: &'a BTreeMap<String, String>,
    /// The design's name.
    pub name: &'a str,
    /// The netlist's file name, for the header.
    pub source: &'a str,
    /// `--section` rules: sections for the components they match, in place of the sheet's.
    pub sections: &'a [SectionRule],
}

/// An imported design.
#[derive(Clone, Debug)]
pub struct Import {
    /// The design file's text.
    pub design: String,
    /// What needs a decision: one line each, naming the part, pin and net.
    pub todos: Vec<String>,
    /// Components left out as passives, connectors or power symbols (their references).
    pub skipped: Vec<String>,
}

/// A reference that names a passive, a connector or a power symbol: no delay of its own here.
fn passive(reference: &str) -> bool {
    let letters: String = reference
        .chars()
        .take_while(|c| !c.is_ascii_digit())
        .collect();
    reference.starts_with('#')
        || matches!(
            letters.as_str(),
            "R" | "RN"
                | "C"
                | "L"
                | "D"
                | "LED"
                | "J"
                | "P"
                | "SW"
                | "TP"
                | "FB"
                | "Y"
                | "X"
                | "BT"
                | "H"
        )
}

/// A net name as a signal name: without the root sheet's "/", spaces and commas as "_".
fn signal(net: &str) -> String {
    net.trim_start_matches('/')
        .chars()
        .map(|c| {
            if c.is_whitespace() || c == ',' {
                '_'
            } else {
                c
            }
        })
        .collect()
}

/// The digits of a pin name ("1A" → "1", "A0" → "0", "I/O7" → "7"): the gate or bit it is in.
fn bit(name: &str) -> String {
    name.chars().filter(char::is_ascii_digit).collect()
}

fn flip(e: Edge) -> Edge {
    match e {
        Edge::Rise => Edge::Fall,
        Edge::Fall => Edge::Rise,
    }
}

fn edge_word(e: Edge) -> &'static str {
    match e {
        Edge::Rise => "rise",
        Edge::Fall => "fall",
    }
}

/// The nets on one group of a component's pins, with each pin's bit.
type NetsOf<'a> = dyn Fn(usize, &str) -> Vec<(String, String)> + 'a;

/// A matched component.
struct Comp<'a> {
    reference: String,
    type_name: String,
    part: &'a Part,
    pins: &'a [Pin],
    section: Option<String>,
}

/// One clocked part: its master edge, clock buffers and clock pin group.
struct Clocked {
    comp: usize,
    edge: Edge,
    via: Vec<String>,
    group: String,
}

/// Import a netlist.
pub fn import(net: &Netlist, lib: &Library, o: &Options) -> Result<Import, String> {
    let mut todos = Vec::new();
    let mut skipped = Vec::new();
    let mut comps: Vec<Comp> = Vec::new();
    let mut by_ref: HashMap<&str, usize> = HashMap::new();
    let pins_of = |reference: &str| -> Vec<String> {
        let mut v: Vec<String> = net
            .nets
            .iter()
            .flat_map(|n| {
                n.nodes
                    .iter()
                    .filter(|x| x.reference == reference)
                    .map(move |x| format!("pin {} on {}", x.pin, n.name))
            })
            .collect();
        v.sort();
        v
    };
    for c in &net.components {
        if passive(&c.reference) {
            skipped.push(c.reference.clone());
            continue;
        }
        let type_name = o
            .map
            .get(&c.value)
            .cloned()
            .unwrap_or_else(|| c.value.clone());
        let Some(i) = lib.part_index(&type_name) else {
            todos.push(format!(
                "{}: value \"{}\" is no library part ({}): map it in the --map file (\"{}\" = \"74HC…\") or add the part with --parts",
                c.reference,
                c.value,
                pins_of(&c.reference).join(", "),
                c.value
            ));
            continue;
        };
        let Some(pinout) = lib.pinout(&type_name) else {
            todos.push(format!(
                "{}: {type_name} has no pin map in the library: its connections are not followed ({})",
                c.reference,
                pins_of(&c.reference).join(", ")
            ));
            continue;
        };
        let section = match section_for(o.sections, &c.reference, &c.sheet) {
            Some(s) => s.to_string(),
            None => c.sheet.trim_matches('/').replace('/', "_"),
        };
        by_ref.insert(c.reference.as_str(), comps.len());
        comps.push(Comp {
            reference: c.reference.clone(),
            type_name,
            part: &lib.parts[i],
            pins: &pinout.pins,
            section: (!section.is_empty()).then_some(section),
        });
    }
    // the pins on each net (matched components only), and which nets carry power
    let mut on_net: Vec<Vec<(usize, &Pin)>> = vec![Vec::new(); net.nets.len()];
    let mut net_of: HashMap<(usize, u32), usize> = HashMap::new();
    let mut power = vec![false; net.nets.len()];
    for (ni, n) in net.nets.iter().enumerate() {
        let bare = signal(&n.name).to_ascii_uppercase();
        power[ni] = matches!(
            bare.as_str(),
            "GND" | "VCC" | "VDD" | "VSS" | "+5V" | "+3V3" | "+3.3V"
        );
        for node in &n.nodes {
            let Some(&ci) = by_ref.get(node.reference.as_str()) else {
                continue;
            };
            let pin = node
                .pin
                .parse::<u32>()
                .ok()
                .and_then(|p| comps[ci].pins.get((p as usize).wrapping_sub(1)));
            match pin {
                Some(pin) => {
                    power[ni] |= matches!(pin.role, PinRole::Power | PinRole::Ground);
                    on_net[ni].push((ci, pin));
                    net_of.insert((ci, pin.number), ni);
                }
                None => todos.push(format!(
                    "{}: pin \"{}\" on net {} is not a pin of its {}-pin package",
                    node.reference,
                    node.pin,
                    n.name,
                    comps[ci].pins.len()
                )),
            }
        }
    }
    let clock_net = net
        .nets
        .iter()
        .position(|n| n.name.trim_start_matches('/') == o.clock.trim_start_matches('/'))
        .ok_or_else(|| {
            let mut names: Vec<&str> = net.nets.iter().map(|n| n.name.as_str()).collect();
            names.truncate(12);
            format!(
                "no net named \"{}\" in the netlist (nets: {}…)",
                o.clock,
                names.join(", ")
            )
        })?;
    // the clock: from its net through inverters and buffers to every clock pin
    let mut domain: HashMap<usize, (Edge, Vec<String>)> = HashMap::new();
    let mut clocked: Vec<Clocked> = Vec::new();
    let mut queue = vec![(clock_net, Edge::Rise, Vec::<String>::new())];
    domain.insert(clock_net, (Edge::Rise, Vec::new()));
    while let Some((ni, edge, via)) = queue.pop() {
        for &(ci, pin) in &on_net[ni] {
            let c = &comps[ci];
            match pin.role {
                PinRole::Clock => {
                    if clocked.iter().any(|k| k.comp == ci) {
                        continue;
                    }
                    let master = match c.part.clock_edge {
                        ActiveEdge::Rise => edge,
                        ActiveEdge::Fall => flip(edge),
                    };
                    clocked.push(Clocked {
                        comp: ci,
                        edge: master,
                        via: via.clone(),
                        group: pin.group.clone(),
                    });
                }
                PinRole::Input => {
                    let delays: Vec<&str> = c
                        .part
                        .arcs
                        .iter()
                        .filter(|a| a.kind == ArcKind::Delay)
                        .map(|a| a.name.as_str())
                        .collect();
                    let function = c.part.function.to_ascii_lowercase();
                    let inverts = function.contains("invert");
                    let simple = delays.len() == 1
                        && delays[0].split("->").next() == Some(pin.group.as_str());
                    if !(simple && (inverts || function.contains("buffer"))) {
                        todos.push(format!(
                            "clock net {} reaches {} pin {} ({}), a {} ({}): not a buffer or inverter this import can follow; the clock is not followed past it",
                            net.nets[ni].name, c.reference, pin.number, pin.name, c.type_name, c.part.function
                        ));
                        continue;
                    }
                    let out_group = delays[0].split("->").nth(1).unwrap_or("").trim();
                    let next = if inverts { flip(edge) } else { edge };
                    for out in c.pins.iter().filter(|p| p.group == out_group && bit(&p.name) == bit(&pin.name)) {
                        if let Some(&no) = net_of.get(&(ci, out.number))
                            && let std::collections::hash_map::Entry::Vacant(e) = domain.entry(no)
                        {
                            let mut v = via.clone();
                            v.push(format!("{} {}", c.reference, delays[0]));
                            e.insert((next, v.clone()));
                            queue.push((no, next, v));
                        }
                    }
                }
                PinRole::Output
                | PinRole::Power
                | PinRole::Ground
                | PinRole::Bidirectional
                | PinRole::NotConnected => {}
                PinRole::Enable | PinRole::Control => todos.push(format!(
                    "clock net {} reaches {} pin {} ({}), an {} input, not a clock pin: check the schematic",
                    net.nets[ni].name,
                    c.reference,
                    pin.number,
                    pin.name,
                    pin.role.word()
                )),
            }
        }
    }
    // every input pin is driven, tied to power, on the clock, or it is floating
    let driven = |ni: usize| {
        power[ni]
            || domain.contains_key(&ni)
            || on_net[ni]
                .iter()
                .any(|(_, p)| matches!(p.role, PinRole::Output | PinRole::Bidirectional))
    };
    for (ci, c) in comps.iter().enumerate() {
        for p in c.pins {
            let input = matches!(
                p.role,
                PinRole::Input | PinRole::Clock | PinRole::Enable | PinRole::Control
            );
            match net_of.get(&(ci, p.number)) {
                _ if !input => {}
                None => todos.push(format!(
                    "{} pin {} ({}) is not connected: a floating {} pin",
                    c.reference,
                    p.number,
                    p.name,
                    p.role.word()
                )),
                Some(&ni) if !driven(ni) => todos.push(format!(
                    "{} pin {} ({}) is on net {}, which nothing drives: a floating input",
                    c.reference, p.number, p.name, net.nets[ni].name
                )),
                _ => {}
            }
        }
    }
    // two drivers on one net, one of them without an enable; a bidirectional pin (a
    // transceiver's side, a memory's data) beside one such output is that output's load, not a
    // second driver: it can face in, and which way it faces is not decided here
    for (ni, pins) in on_net.iter().enumerate() {
        if power[ni] {
            continue;
        }
        let drivers: Vec<(usize, &Pin, bool)> = pins
            .iter()
            .filter(|(_, p)| matches!(p.role, PinRole::Output | PinRole::Bidirectional))
            .map(|&(ci, p)| (ci, p, three_state(&comps[ci], p)))
            .collect();
        let outputs = drivers
            .iter()
            .filter(|d| d.1.role == PinRole::Output)
            .count();
        if outputs >= 2 && drivers.iter().any(|d| !d.2) {
            let who: Vec<String> = drivers
                .iter()
                .map(|(ci, p, _)| format!("{} pin {} ({})", comps[*ci].reference, p.number, p.name))
                .collect();
            todos.push(format!(
                "net {} is driven by {}: outputs without an enable fight; which one drives it?",
                net.nets[ni].name,
                who.join(" and ")
            ));
        }
    }
    let nets_of = |ci: usize, group: &str| -> Vec<(String, String)> {
        comps[ci]
            .pins
            .iter()
            .filter(|p| p.group == group)
            .filter_map(|p| net_of.get(&(ci, p.number)).map(|&ni| (ni, p)))
            .filter(|(ni, _)| !power[*ni])
            .map(|(ni, p)| (signal(&net.nets[ni].name), bit(&p.name)))
            .collect()
    };
    // combinational arcs between the nets on each part's pins
    let mut chains: Vec<String> = Vec::new();
    let mut seen = std::collections::HashSet::new();
    for (ci, c) in comps.iter().enumerate() {
        let clock_group = clocked
            .iter()
            .find(|k| k.comp == ci)
            .map(|k| k.group.as_str());
        for a in c.part.arcs.iter().filter(|a| a.kind == ArcKind::Delay) {
            let mut sides = a.name.split("->").map(str::trim);
            let (Some(x), Some(y)) = (sides.next(), sides.next()) else {
                continue;
            };
            if Some(x) == clock_group {
                continue;
            }
            let ins: Vec<(String, String)> = nets_of(ci, x)
                .into_iter()
                .filter(|(s, _)| !domain.keys().any(|&ni| signal(&net.nets[ni].name) == *s))
                .collect();
            let outs = nets_of(ci, y);
            // bit by bit where both sides of the package have the same bits (gates,
            // transceivers), else every input to every output (adders, decoders, memories)
            let bits = |g: &str| {
                let mut v: Vec<String> = c
                    .pins
                    .iter()
                    .filter(|p| p.group == g)
                    .map(|p| bit(&p.name))
                    .collect();
                v.sort();
                v.dedup();
                v
            };
            let (ib, ob) = (bits(x), bits(y));
            let bitwise =
                !c.part.function.contains("adder") && ib == ob && !ib.contains(&String::new());
            for (s_in, b_in) in &ins {
                for (s_out, b_out) in &outs {
                    if (!bitwise || b_in == b_out) && s_in != s_out {
                        let chain = format!("{s_in} -> {} {} -> {s_out}", c.reference, a.name);
                        if seen.insert(chain.clone()) {
                            chains.push(chain);
                        }
                    }
                }
            }
        }
    }
    Ok(Import {
        design: write(o, &comps, &clocked, &chains, &mut todos, &nets_of),
        todos,
        skipped,
    })
}

/// Whether an output pin can be turned off (an enable arc of its part reaches its group).
fn three_state(c: &Comp, p: &Pin) -> bool {
    p.role == PinRole::Bidirectional
        || c.part.arcs.iter().any(|a| {
            let mut s = a.name.split("->").map(str::trim);
            let (x, y) = (s.next().unwrap_or(""), s.next().unwrap_or(""));
            y == p.group
                && c.pins
                    .iter()
                    .any(|q| q.group == x && q.role == PinRole::Enable)
        })
}

/// A TOML string.
fn q(s: &str) -> String {
    format!("\"{}\"", s.replace('\\', "\\\\").replace('"', "\\\""))
}

fn list(v: &[String]) -> String {
    let items: Vec<String> = v.iter().map(|s| q(s)).collect();
    format!("[{}]", items.join(", "))
}

/// The design text.
fn write(
    o: &Options,
    comps: &[Comp],
    clocked: &[Clocked],
    chains: &[String],
    todos: &mut Vec<String>,
    nets_of: &NetsOf,
) -> String {
    let regs = registers(comps, clocked, chains, todos, nets_of);
    let mut out = format!(
        "# Imported from {} by `slackmeter import` (master clock: net {}). Delays come from the\n\
         # part library; none is made up. Each TODO needs a decision before the budget is trusted.\n\n",
        o.source, o.clock
    );
    if !o.sections.is_empty() {
        let given: Vec<String> = o
            .sections
            .iter()
            .map(|r| format!("--section {}", r.text))
            .collect();
        out += &format!(
            "# Sections from {}; the other parts' from their sheet names.\n\n",
            given.join(" ")
        );
    }
    out += &format!("design = {{ name = {} }}\n", q(o.name));
    let mut sections: Vec<&str> = comps.iter().filter_map(|c| c.section.as_deref()).collect();
    sections.dedup();
    sections.sort_unstable();
    sections.dedup();
    if !sections.is_empty() {
        let s: Vec<String> = sections
            .iter()
            .map(|s| format!("{{ name = {} }}", q(s)))
            .collect();
        out += &format!("section = [{}]\n", s.join(", "));
    }
    for t in todos {
        out += &format!("# TODO {t}\n");
    }
    // alike parts in one line, in the order they first appear
    let mut groups: Vec<(&str, Option<&str>, Vec<String>)> = Vec::new();
    for c in comps {
        match groups
            .iter_mut()
            .find(|g| g.0 == c.type_name && g.1 == c.section.as_deref())
        {
            Some(g) => g.2.push(c.reference.clone()),
            None => groups.push((
                &c.type_name,
                c.section.as_deref(),
                vec![c.reference.clone()],
            )),
        }
    }
    out += "\npart = [\n";
    for (t, s, refs) in &groups {
        let section = s.map_or(String::new(), |s| format!(", section = {}", q(s)));
        out += &format!("  {{ refs = {}, type = {}{section} }},\n", list(refs), q(t));
    }
    out += "]\n\nchains = [\n";
    for c in chains {
        out += &format!("  {},\n", q(c));
    }
    out += "]\n";
    out += &regs;
    out
}

/// The register groups, one per master edge and clock path; a capture of a net nothing in the
/// design drives (no launch, no chain) is a TODO instead.
fn registers(
    comps: &[Comp],
    clocked: &[Clocked],
    chains: &[String],
    todos: &mut Vec<String>,
    nets_of: &NetsOf,
) -> String {
    let mut timed: std::collections::HashSet<String> = chains
        .iter()
        .filter_map(|c| c.rsplit(" -> ").next().map(str::to_string))
        .collect();
    for k in clocked {
        for a in comps[k.comp]
            .part
            .arcs
            .iter()
            .filter(|a| a.kind == ArcKind::Delay)
        {
            let mut s = a.name.split("->").map(str::trim);
            if s.next() == Some(k.group.as_str()) {
                let y = s.next().unwrap_or("");
                timed.extend(nets_of(k.comp, y).into_iter().map(|n| n.0));
            }
        }
    }
    let mut regs = String::new();
    let mut keys: Vec<(Edge, Vec<String>)> = Vec::new();
    for k in clocked {
        if !keys.iter().any(|(e, v)| *e == k.edge && *v == k.via) {
            keys.push((k.edge, k.via.clone()));
        }
    }
    let mut keys: Vec<(Edge, Vec<String>)> = Vec::new();
    for k in clocked {
        if !keys.iter().any(|(e, v)| *e == k.edge && *v == k.via) {
            keys.push((k.edge, k.via.clone()));
        }
    }
    for (edge, via) in keys {
        regs += &format!("\n[[register]]\nedge = {}\n", q(edge_word(edge)));
        if !via.is_empty() {
            regs += &format!("clock_via = {}\n", list(&via));
        }
        regs += "members = [\n";
        for k in clocked.iter().filter(|k| k.edge == edge && k.via == via) {
            let c = &comps[k.comp];
            for a in &c.part.arcs {
                let mut s = a.name.split("->").map(str::trim);
                let (x, y) = (s.next().unwrap_or(""), s.next().unwrap_or(""));
                let signals = |g: &str| {
                    let mut v: Vec<String> = nets_of(k.comp, g).into_iter().map(|n| n.0).collect();
                    v.dedup();
                    v
                };
                if a.kind == ArcKind::Delay && x == k.group {
                    let qs = signals(y);
                    if !qs.is_empty() {
                        regs += &format!(
                            "  {{ ref = {}, arc = {}, q = {} }},\n",
                            q(&c.reference),
                            q(&a.name),
                            list(&qs)
                        );
                    }
                } else if a.kind == ArcKind::Setup && y == k.group {
                    let (ds, untimed): (Vec<String>, Vec<String>) =
                        signals(x).into_iter().partition(|s| timed.contains(s));
                    for s in untimed {
                        todos.push(format!(
                            "{} {}: net {s} is driven by no part this import times (an unknown part, or a gate whose inputs are not connected): its capture is left out",
                            c.reference, a.name
                        ));
                    }
                    if !ds.is_empty() {
                        regs += &format!(
                            "  {{ ref = {}, check = {}, d = {} }},\n",
                            q(&c.reference),
                            q(&a.name),
                            list(&ds)
                        );
                    }
                }
            }
        }
        regs += "]\n";
    }
    regs
}

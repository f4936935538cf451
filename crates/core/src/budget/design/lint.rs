//! The checks `slackmeter check` makes on a resolved design, without solving it: inputs nothing
//! drives, outputs nothing reads, captures no launch reaches, parts outside every section (and,
//! in `contention.rs`, buses driven twice in one microstep).

use std::ops::Range;

use serde::Serialize;

use super::model::Design;

/// Which check found a problem.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Lint {
    /// The file does not load (the loader's own located error).
    Load,
    /// A signal feeds an arc but no launch or arc drives it.
    UndrivenInput,
    /// A launched or arc-driven signal that no arc reads and no capture takes.
    UnusedOutput,
    /// A capture that no launch reaches through the arcs: it is never timed.
    UnreachedCapture,
    /// A part instance in no section although the design has sections.
    NoSection,
    /// A microstep turns on two drivers of one bus (their `when` control bits).
    BusContention,
    /// A bus driver the microsteps cannot be checked against: no `when`, or no microsteps.
    UncheckedDriver,
    /// A driver's `when` bit that no microstep asserts: it never drives (a misspelt bit?).
    NeverEnabled,
}

/// How bad a finding is: errors make `check` fail, warnings do not.
#[derive(Clone, Copy, Debug, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Severity {
    /// Wrong: the budget would leave part of the machine untimed.
    Error,
    /// Suspicious, but the budget is complete without it.
    Warning,
}

impl Lint {
    /// The severity of every finding of this check.
    pub fn severity(self) -> Severity {
        match self {
            Lint::Load | Lint::UndrivenInput | Lint::UnreachedCapture | Lint::BusContention => {
                Severity::Error
            }
            Lint::UnusedOutput | Lint::NoSection | Lint::UncheckedDriver | Lint::NeverEnabled => {
                Severity::Warning
            }
        }
    }
}

/// Where each resolved entry was written (spans in the loader's joined span space), index by
/// index with the design's launches, arcs, captures and instances.
#[derive(Clone, Debug, Default)]
pub(super) struct Sites {
    pub launch_to: Vec<Range<usize>>,
    pub arc_from: Vec<Range<usize>>,
    pub arc_to: Vec<Range<usize>>,
    pub capture_signal: Vec<Range<usize>>,
    pub part_ref: Vec<Range<usize>>,
    /// The buses' drivers and the microsteps, for the contention checks.
    pub control: Control,
}

/// A bus driver: its bus, its part (with where it was written) and its `when` bit.
#[derive(Clone, Debug, Default)]
pub(super) struct Driver {
    pub bus: String,
    pub part: String,
    pub part_span: Range<usize>,
    pub when: Option<(String, Range<usize>)>,
}

/// A microstep: its name and the control bits it asserts, each with its span.
#[derive(Clone, Debug, Default)]
pub(super) struct Step {
    pub name: String,
    pub on: Vec<(String, Range<usize>)>,
}

/// What the contention checks (`contention.rs`) read: every bus driver and every microstep, in file order.
#[derive(Clone, Debug, Default)]
pub(super) struct Control {
    pub drivers: Vec<Driver>,
    pub steps: Vec<Step>,
}

/// One problem, not yet placed in a file.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct Found {
    pub lint: Lint,
    pub span: Range<usize>,
    pub message: String,
    pub label: &'static str,
    pub help: String,
}

/// Every check on `d`, in file order (by span start) within each check.
pub(super) fn lint(d: &Design, at: &Sites) -> Vec<Found> {
    let mut out = undriven_inputs(d, at);
    out.extend(unused_outputs(d, at));
    out.extend(unreached_captures(d, at));
    out.extend(parts_without_section(d, at));
    out
}

/// The earliest of `spans` (where a signal is first written in that role).
fn first(spans: impl Iterator<Item = Range<usize>>) -> Option<Range<usize>> {
    spans.min_by_key(|s| s.start)
}

/// For each signal, whether a launch or an arc drives it.
fn driven(d: &Design) -> Vec<bool> {
    let mut driven = vec![false; d.signals.len()];
    d.launches.iter().for_each(|l| driven[l.to] = true);
    d.arcs.iter().for_each(|a| driven[a.to] = true);
    driven
}

/// Signals some arc reads that nothing drives: a misspelt name, or a source left out.
fn undriven_inputs(d: &Design, at: &Sites) -> Vec<Found> {
    let driven = driven(d);
    let mut out: Vec<Found> = (0..d.signals.len())
        .filter(|&s| !driven[s] && !d.fanout[s].is_empty())
        .filter_map(|s| {
            let span = first(d.fanout[s].iter().map(|&ai| at.arc_from[ai].clone()))?;
            let n = d.fanout[s].len();
            Some(Found {
                lint: Lint::UndrivenInput,
                span,
                message: format!(
                    "signal \"{}\" is an input of {n} arc{} but nothing drives it: {} never timed",
                    d.signals[s],
                    if n == 1 { "" } else { "s" },
                    if n == 1 { "that arc is" } else { "they are" }
                ),
                label: "read here, driven nowhere",
                help: "check the spelling against the signals launched or driven by arcs, or add \
                       the [[launch]] or [[arc]] that drives it"
                    .into(),
            })
        })
        .collect();
    out.sort_by_key(|f| f.span.start);
    out
}

/// Signals a launch or an arc drives that no arc reads and no capture takes.
fn unused_outputs(d: &Design, at: &Sites) -> Vec<Found> {
    let mut captured = vec![false; d.signals.len()];
    d.captures.iter().for_each(|c| captured[c.signal] = true);
    let driven = driven(d);
    let mut out: Vec<Found> = (0..d.signals.len())
        .filter(|&s| driven[s] && !captured[s] && d.fanout[s].is_empty())
        .filter_map(|s| {
            let launched = d.launches.iter().enumerate().filter(|(_, l)| l.to == s);
            let by_arc = d.arcs.iter().enumerate().filter(|(_, a)| a.to == s);
            let span = first(
                launched
                    .map(|(i, _)| at.launch_to[i].clone())
                    .chain(by_arc.map(|(i, _)| at.arc_to[i].clone())),
            )?;
            Some(Found {
                lint: Lint::UnusedOutput,
                span,
                message: format!(
                    "signal \"{}\" is driven but goes nowhere: no arc reads it and no capture takes it",
                    d.signals[s]
                ),
                label: "driven here, read nowhere",
                help: "connect it with an [[arc]] or a [[capture]], or remove the entry if the \
                       output is unused on the board"
                    .into(),
            })
        })
        .collect();
    out.sort_by_key(|f| f.span.start);
    out
}

/// Captures that no launch reaches through the arcs (the solver skips them).
fn unreached_captures(d: &Design, at: &Sites) -> Vec<Found> {
    let mut reached = vec![false; d.signals.len()];
    d.launches.iter().for_each(|l| reached[l.to] = true);
    for &s in &d.order {
        if reached[s] {
            for &ai in &d.fanout[s] {
                reached[d.arcs[ai].to] = true;
            }
        }
    }
    d.captures
        .iter()
        .enumerate()
        .filter(|(_, c)| !reached[c.signal])
        .map(|(i, c)| Found {
            lint: Lint::UnreachedCapture,
            span: at.capture_signal[i].clone(),
            message: format!(
                "capture \"{}\" of signal \"{}\" has no path from any launch: it is never timed",
                c.name, d.signals[c.signal]
            ),
            label: "no launch reaches this",
            help: "connect a launched signal to it through [[arc]] entries (chains), or check \
                   the signal names along the way"
                .into(),
        })
        .collect()
}

/// Part instances in no section when the design has sections (their supply is unknown).
fn parts_without_section(d: &Design, at: &Sites) -> Vec<Found> {
    if d.sections.is_empty() {
        return Vec::new();
    }
    let names: Vec<&str> = d.sections.iter().map(|s| s.name.as_str()).collect();
    d.instances
        .iter()
        .enumerate()
        .filter(|(_, inst)| inst.section.is_none())
        .map(|(i, inst)| Found {
            lint: Lint::NoSection,
            span: at.part_ref[i].clone(),
            message: format!(
                "part {} is in no section, though the design has sections: it is derated at \
                 the design's supply, not a section's rail",
                inst.reference
            ),
            label: "no section",
            help: format!(
                "add section = \"…\" to its [[part]] entry; sections here: {}",
                names.join(", ")
            ),
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::super::{Checked, InMemory, NoIncludes};
    use super::*;
    use crate::budget::library::model::Library;
    use crate::diag::Source;

    fn check(text: &str) -> Checked {
        Design::check(
            Source::new("t.toml", text),
            &Library::builtin(),
            &NoIncludes,
        )
    }

    /// (lint, line, column) of every finding.
    fn found(text: &str) -> Vec<(Lint, usize, usize)> {
        check(text)
            .findings
            .iter()
            .map(|f| (f.lint, f.located.line, f.located.column))
            .collect()
    }

    /// Line and column of the `nth` (0-based) occurrence of `needle` in `text`: where a
    /// finding must point, found by searching the text rather than counted by hand.
    fn place(text: &str, needle: &str, nth: usize) -> (usize, usize) {
        let at = text
            .match_indices(needle)
            .nth(nth)
            .unwrap_or_else(|| panic!("{needle:?} #{nth} not in the text"))
            .0;
        Source::new("t.toml", text).line_col(at)
    }

    /// A register U1 launching `q` and capturing `d`, with `body` between.
    fn design(body: &str) -> String {
        format!(
            "[design]\nname = \"t\"\n\
             [[part]]\nref = \"U1\"\ntype = \"74HC574\"\n\
             [[part]]\nref = \"U2\"\ntype = \"74HC04\"\n\
             [[launch]]\nedge = \"rise\"\npart = \"U1\"\narc = \"CLK->Q\"\nto = \"q\"\n\
             {body}\
             [[capture]]\nsignal = \"d\"\nedge = \"rise\"\npart = \"U1\"\ncheck = \"D->CLK\"\n"
        )
    }

    const Q_TO_D: &str = "[[arc]]\nfrom = \"q\"\nto = \"d\"\npart = \"U2\"\narc = \"A->Y\"\n";

    #[test]
    fn a_clean_design_and_the_demo_have_no_findings() {
        assert_eq!(found(&design(Q_TO_D)), vec![]);
        let demo = Design::check(
            Source::new(super::super::DEMO_NAME, super::super::DEMO_DESIGN),
            &Library::builtin(),
            &NoIncludes,
        );
        let all: Vec<String> = demo.findings.iter().map(|f| f.to_string()).collect();
        assert!(all.is_empty(), "{all:?}");
        assert!(demo.design.is_some());
    }

    #[test]
    fn an_input_nothing_drives_is_an_error_where_it_is_first_read() {
        // "qq" is a misspelling of "q": read by two arcs, driven by none
        let body = "[[arc]]\nfrom = \"qq\"\nto = \"d\"\npart = \"U2\"\narc = \"A->Y\"\n\
                    [[arc]]\nfrom = \"qq\"\nto = \"d\"\ndelay = { max = \"1 ns\" }\n\
                    [[arc]]\nfrom = \"q\"\nto = \"d\"\ndelay = { max = \"1 ns\" }\n";
        let text = design(body);
        let c = check(&text);
        let f: Vec<_> = c
            .findings
            .iter()
            .filter(|f| f.lint == Lint::UndrivenInput)
            .collect();
        assert_eq!(f.len(), 1, "one finding per signal, not per arc");
        assert_eq!(
            (f[0].located.line, f[0].located.column),
            place(&text, "\"qq\"", 0)
        );
        assert!(
            f[0].located
                .message
                .contains("\"qq\" is an input of 2 arcs")
        );
        assert_eq!(f[0].severity(), Severity::Error);
        assert!(c.has_errors());
    }

    #[test]
    fn an_output_nothing_reads_is_a_warning_at_its_driver() {
        // U2 drives "spare" from q: nothing reads it
        let body = format!(
            "{Q_TO_D}[[arc]]\nfrom = \"q\"\nto = \"spare\"\npart = \"U2\"\narc = \"A->Y\"\n"
        );
        let text = design(&body);
        let c = check(&text);
        let (line, column) = place(&text, "\"spare\"", 0);
        assert_eq!(found(&text), vec![(Lint::UnusedOutput, line, column)]);
        assert!(!c.has_errors(), "a warning alone is not an error");
        assert_eq!(c.findings[0].severity(), Severity::Warning);
        assert!(c.findings[0].located.message.contains("\"spare\""));
    }

    #[test]
    fn a_launch_nothing_reads_is_a_warning_at_the_launch() {
        let body = format!(
            "{Q_TO_D}[[launch]]\nedge = \"rise\"\npart = \"U1\"\narc = \"CLK->Q\"\nto = \"q2\"\n"
        );
        let text = design(&body);
        let (line, column) = place(&text, "\"q2\"", 0);
        assert_eq!(found(&text), vec![(Lint::UnusedOutput, line, column)]);
    }

    #[test]
    fn a_capture_no_launch_reaches_is_an_error_at_its_signal() {
        // "d" is driven from "x", which nothing drives; a second capture of "q" is reached
        let text = design("[[arc]]\nfrom = \"x\"\nto = \"d\"\npart = \"U2\"\narc = \"A->Y\"\n")
            + "[[capture]]\nsignal = \"q\"\nedge = \"rise\"\nsetup = \"5 ns\"\n";
        let (xl, xc) = place(&text, "\"x\"", 0);
        let (dl, dc) = place(&text, "\"d\"", 1);
        assert_eq!(
            found(&text),
            vec![
                (Lint::UndrivenInput, xl, xc),
                (Lint::UnreachedCapture, dl, dc)
            ]
        );
        // the loader alone accepts it (one capture is reached): only the check says so
        assert!(check(&text).design.is_some());
        let d = Design::parse_with(
            Source::new("t.toml", text),
            &Library::builtin(),
            &NoIncludes,
        );
        assert!(d.is_ok());
    }

    #[test]
    fn every_capture_unreached_is_listed_not_one_load_error() {
        // the loader refuses this file (no capture reached); the check says why, item by item
        let text = design("[[arc]]\nfrom = \"x\"\nto = \"d\"\npart = \"U2\"\narc = \"A->Y\"\n");
        let lints: Vec<Lint> = found(&text).into_iter().map(|f| f.0).collect();
        assert_eq!(
            lints,
            vec![
                Lint::UndrivenInput,
                Lint::UnusedOutput,
                Lint::UnreachedCapture
            ]
        );
    }

    #[test]
    fn parts_without_a_section_are_warned_only_when_there_are_sections() {
        assert_eq!(
            found(&design(Q_TO_D)),
            vec![],
            "no sections: nothing to say"
        );
        let text = design(Q_TO_D).replacen(
            "[[part]]\nref = \"U1\"\ntype = \"74HC574\"\n",
            "[[section]]\nname = \"near\"\n[[part]]\nref = \"U1\"\ntype = \"74HC574\"\nsection = \"near\"\n",
            1,
        );
        let c = check(&text);
        let (line, column) = place(&text, "\"U2\"", 0);
        assert_eq!(found(&text), vec![(Lint::NoSection, line, column)]);
        assert!(c.findings[0].located.message.contains("part U2"));
        assert!(
            c.findings[0]
                .located
                .help
                .as_deref()
                .is_some_and(|h| h.contains("near"))
        );
    }

    #[test]
    fn a_file_that_does_not_load_is_one_located_error() {
        let text = design(Q_TO_D).replace("74HC04", "74HC9999");
        let c = check(&text);
        assert!(c.design.is_none());
        assert_eq!(found(&text), vec![(Lint::Load, 8, 8)]);
        assert_eq!(place(&text, "\"74HC9999\"", 0), (8, 8));
        assert!(c.has_errors());
    }

    #[test]
    fn bus_inputs_are_located_at_the_driver_entry() {
        // a bus driver passes "a_qq" (misspelt) onto the bus; "a_q" is launched and unused
        let text = "[design]\nname = \"t\"\n\
            [[part]]\nrefs = [\"U1\", \"U2\"]\ntype = \"74HC574\"\n\
            [[part]]\nref = \"U10\"\ntype = \"74HC245\"\n\
            [[register]]\nedge = \"rise\"\nmembers = [\n\
            { ref = \"U1\", q = \"a_q\" },\n{ ref = \"U2\", q = \"b_q\", d = \"bus\" },\n]\n\
            [[bus]]\nsignal = \"bus\"\ndata_arc = \"A->B\"\n\
            drivers = [\n{ part = \"U10\", from = [\"a_qq\", \"b_q\"] },\n]\n";
        let (il, ic) = place(text, "\"a_qq\"", 0);
        let (ol, oc) = place(text, "\"a_q\"", 0);
        assert_eq!(
            found(text),
            vec![(Lint::UndrivenInput, il, ic), (Lint::UnusedOutput, ol, oc)]
        );
    }

    #[test]
    fn a_finding_in_an_included_file_points_into_that_file() {
        // the included board reads "qq" (its own name, prefixed b_): driven nowhere
        let board = "[design]\nname = \"board\"\n\
                     [[part]]\nref = \"U2\"\ntype = \"74HC04\"\n\
                     [[arc]]\nfrom = \"qq\"\nto = \"d\"\npart = \"U2\"\narc = \"A->Y\"\n";
        let top = design(Q_TO_D).replacen(
            "[[part]]\nref = \"U2\"\ntype = \"74HC04\"\n",
            "[[part]]\nref = \"U2\"\ntype = \"74HC04\"\n\
             [[include]]\nfile = \"board.toml\"\nprefix = \"b_\"\nconnect = { d = \"d\" }\n",
            1,
        );
        let reader = InMemory(vec![("board.toml".into(), board.into())]);
        let (il, ic) = place(&top, "\"board.toml\"", 0);
        let c = Design::check(Source::new("t.toml", top), &Library::builtin(), &reader);
        assert_eq!(c.findings.len(), 1, "{:?}", c.findings);
        let f = &c.findings[0].located;
        assert_eq!(f.file, "board.toml");
        assert_eq!((f.line, f.column), place(board, "\"qq\"", 0));
        assert!(f.message.contains("\"b_qq\""), "{}", f.message);
        assert!(
            f.help
                .as_deref()
                .is_some_and(|h| h.contains(&format!("included at t.toml:{il}:{ic}"))),
            "{:?}",
            f.help
        );
    }
}

//! Two drivers on one bus at once: each `[[microstep]]` lists the control bits it asserts, each
//! bus driver its `when` bit; a step that turns on two drivers of one bus is an error. Also
//! drivers that cannot be checked (no `when`, or no microsteps) and `when` bits no step asserts.

use std::collections::BTreeMap;
use std::ops::Range;

use super::lint::{Control, Driver, Found, Lint};

/// Every contention finding, in file order.
pub(super) fn lint(c: &Control) -> Vec<Found> {
    let mut out = contention(c);
    out.extend(unchecked(c));
    out.extend(never_enabled(c));
    out.sort_by_key(|f| f.span.start);
    out
}

/// Per step and bus, the drivers whose `when` bit the step asserts; two or more is an error at
/// the step's entry for the second driver's bit.
fn contention(c: &Control) -> Vec<Found> {
    let mut out = Vec::new();
    for step in &c.steps {
        let mut on: BTreeMap<&str, Vec<(&Driver, &Range<usize>)>> = BTreeMap::new();
        for d in &c.drivers {
            let Some((bit, _)) = &d.when else { continue };
            if let Some((_, at)) = step.on.iter().find(|(b, _)| b.trim() == bit.trim()) {
                on.entry(d.bus.as_str()).or_default().push((d, at));
            }
        }
        for (bus, drivers) in on {
            if drivers.len() < 2 {
                continue;
            }
            let listed: Vec<String> = drivers
                .iter()
                .map(|(d, _)| {
                    let bit = d.when.as_ref().map_or("", |(b, _)| b.as_str());
                    format!("{} (when \"{bit}\")", d.part)
                })
                .collect();
            out.push(Found {
                lint: Lint::BusContention,
                span: drivers[1].1.clone(),
                message: format!(
                    "microstep \"{}\" turns on {} drivers of bus \"{bus}\" at once: {}",
                    step.name,
                    drivers.len(),
                    listed.join(", ")
                ),
                label: "a second driver on here",
                help: "a bus takes one driver per step: drop the extra control bit from this \
                       step, or correct the drivers' when bits"
                    .into(),
            });
        }
    }
    out
}

/// Drivers the steps cannot be checked against: no `when` bit while there are microsteps, or a
/// `when` bit with no microstep in the design.
fn unchecked(c: &Control) -> Vec<Found> {
    c.drivers
        .iter()
        .filter_map(|d| match (&d.when, c.steps.is_empty()) {
            (None, false) => Some(Found {
                lint: Lint::UncheckedDriver,
                span: d.part_span.clone(),
                message: format!(
                    "driver {} of bus \"{}\" has no when bit: the microsteps cannot tell when it \
                     is on, so it is not checked for contention",
                    d.part, d.bus
                ),
                label: "no when",
                help: "add when = \"…\", the control bit that turns this driver on".into(),
            }),
            (Some((_, span)), true) => Some(Found {
                lint: Lint::UncheckedDriver,
                span: span.clone(),
                message: format!(
                    "driver {} of bus \"{}\" names a when bit but the design has no \
                     [[microstep]]: nothing to check it against",
                    d.part, d.bus
                ),
                label: "when, but no microsteps",
                help: "list the machine's steps as [[microstep]] entries with the control bits \
                       each asserts: name = \"fetch 0\", on = [\"pc_out\", \"mar_in\"]"
                    .into(),
            }),
            _ => None,
        })
        .collect()
}

/// `when` bits no microstep asserts (when there are microsteps): the driver never drives.
fn never_enabled(c: &Control) -> Vec<Found> {
    if c.steps.is_empty() {
        return Vec::new();
    }
    c.drivers
        .iter()
        .filter_map(|d| {
            let (bit, span) = d.when.as_ref()?;
            let asserted = c
                .steps
                .iter()
                .any(|s| s.on.iter().any(|(b, _)| b.trim() == bit.trim()));
            (!asserted).then(|| {
                let mut bits: Vec<&str> = c
                    .steps
                    .iter()
                    .flat_map(|s| s.on.iter().map(|(b, _)| b.trim()))
                    .collect();
                bits.sort_unstable();
                bits.dedup();
                if bits.len() > 12 {
                    bits.truncate(12);
                    bits.push("…");
                }
                Found {
                    lint: Lint::NeverEnabled,
                    span: span.clone(),
                    message: format!(
                        "no microstep asserts \"{bit}\": driver {} never drives bus \"{}\"",
                        d.part, d.bus
                    ),
                    label: "asserted by no step",
                    help: format!(
                        "check the spelling against the steps' bits: {}",
                        bits.join(", ")
                    ),
                }
            })
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::super::{Design, InMemory, NoIncludes};
    use super::*;
    use crate::budget::library::model::Library;
    use crate::diag::Source;

    /// Three registers, two 74HC245 drivers (U10 passes a_q, U11 b_q) onto `bus`, which U3
    /// captures; `drivers` and `steps` fill in the `when` bits and the microsteps.
    fn design(when: [&str; 2], steps: &str) -> String {
        format!(
            "[design]\nname = \"t\"\n\
             [[part]]\nrefs = [\"U1\", \"U2\", \"U3\"]\ntype = \"74HC574\"\n\
             [[part]]\nrefs = [\"U10\", \"U11\"]\ntype = \"74HC245\"\n\
             [[register]]\nedge = \"rise\"\nmembers = [\n\
             {{ ref = \"U1\", q = \"a_q\" }},\n{{ ref = \"U2\", q = \"b_q\" }},\n\
             {{ ref = \"U3\", d = \"bus\" }},\n]\n\
             [[bus]]\nsignal = \"bus\"\ndata_arc = \"A->B\"\n\
             drivers = [\n{{ part = \"U10\", from = \"a_q\"{} }},\n\
             {{ part = \"U11\", from = \"b_q\"{} }},\n]\n{steps}",
            when[0], when[1]
        )
    }

    fn found(text: &str) -> Vec<(Lint, usize, usize, String)> {
        Design::check(
            Source::new("t.toml", text),
            &Library::builtin(),
            &NoIncludes,
        )
        .findings
        .iter()
        .map(|f| {
            (
                f.lint,
                f.located.line,
                f.located.column,
                f.located.message.clone(),
            )
        })
        .collect()
    }

    fn place(text: &str, needle: &str, nth: usize) -> (usize, usize) {
        let at = text.match_indices(needle).nth(nth).expect("in the text").0;
        Source::new("t.toml", text).line_col(at)
    }

    const WHEN: [&str; 2] = [", when = \"a_out\"", ", when = \"b_out\""];

    #[test]
    fn steps_that_turn_on_one_driver_each_are_clean() {
        let steps = "[[microstep]]\nname = \"a to c\"\non = [\"a_out\", \"c_in\"]\n\
                     [[microstep]]\nname = \"b to c\"\non = [\"b_out\", \"c_in\"]\n";
        assert_eq!(found(&design(WHEN, steps)), vec![]);
    }

    #[test]
    fn a_step_with_two_drivers_on_is_an_error_at_the_second_bit() {
        let steps = "[[microstep]]\nname = \"fetch\"\non = [\"a_out\"]\n\
                     [[microstep]]\nname = \"clash\"\non = [\"c_in\", \"a_out\", \"b_out\"]\n";
        let text = design(WHEN, steps);
        let f = found(&text);
        assert_eq!(f.len(), 1, "{f:?}");
        let (line, column) = place(&text, "\"b_out\"", 1);
        assert_eq!(
            (f[0].0, f[0].1, f[0].2),
            (Lint::BusContention, line, column)
        );
        assert!(f[0].3.contains("\"clash\""), "{}", f[0].3);
        assert!(
            f[0].3.contains("U10") && f[0].3.contains("U11"),
            "{}",
            f[0].3
        );
        assert_eq!(
            Lint::BusContention.severity(),
            super::super::Severity::Error
        );
    }

    #[test]
    fn drivers_sharing_one_bit_clash_whenever_it_is_asserted() {
        let shared = [", when = \"sel\"", ", when = \"sel\""];
        let steps = "[[microstep]]\nname = \"s0\"\non = [\"sel\"]\n\
                     [[microstep]]\nname = \"s1\"\non = []\n";
        let f = found(&design(shared, steps));
        assert_eq!(
            f.iter().map(|x| x.0).collect::<Vec<_>>(),
            [Lint::BusContention]
        );
        assert!(f[0].3.contains("\"s0\""), "{}", f[0].3);
    }

    #[test]
    fn drivers_that_cannot_be_checked_are_warned_where_written() {
        // one driver without a bit while there are steps
        let steps = "[[microstep]]\nname = \"s0\"\non = [\"a_out\"]\n";
        let text = design([WHEN[0], ""], steps);
        let (l, c) = place(&text, "\"U11\", from", 0);
        let f = found(&text);
        assert_eq!(
            f.iter().map(|x| (x.0, x.1, x.2)).collect::<Vec<_>>(),
            [(Lint::UncheckedDriver, l, c)]
        );
        // bits but no steps at all: one warning per driver, at its bit
        let text = design(WHEN, "");
        let f = found(&text);
        assert_eq!(
            f.iter().map(|x| (x.0, x.1, x.2)).collect::<Vec<_>>(),
            [
                (
                    Lint::UncheckedDriver,
                    place(&text, "\"a_out\"", 0).0,
                    place(&text, "\"a_out\"", 0).1
                ),
                (
                    Lint::UncheckedDriver,
                    place(&text, "\"b_out\"", 0).0,
                    place(&text, "\"b_out\"", 0).1
                ),
            ]
        );
        // neither bits nor steps: nothing to say (the demo design's case)
        assert_eq!(found(&design(["", ""], "")), vec![]);
    }

    #[test]
    fn a_bit_no_step_asserts_is_a_warning_listing_the_steps_bits() {
        let steps = "[[microstep]]\nname = \"s0\"\non = [\"a_out\"]\n\
                     [[microstep]]\nname = \"s1\"\non = [\"b_out\"]\n";
        let text = design([WHEN[0], ", when = \"b_otu\""], steps);
        let f = found(&text);
        let (l, c) = place(&text, "\"b_otu\"", 0);
        assert_eq!(
            f.iter().map(|x| (x.0, x.1, x.2)).collect::<Vec<_>>(),
            [(Lint::NeverEnabled, l, c)]
        );
        let all = Design::check(
            Source::new("t.toml", text),
            &Library::builtin(),
            &NoIncludes,
        );
        let help = all.findings[0].located.help.clone().unwrap_or_default();
        assert!(help.contains("a_out, b_out"), "{help}");
    }

    #[test]
    fn an_included_boards_drivers_are_checked_with_their_parts_prefixed() {
        // the board drives the including design's bus through its own 74HC245 (b_U10)
        let board = "[design]\nname = \"board\"\n\
                     [[part]]\nref = \"U10\"\ntype = \"74HC245\"\n\
                     [[bus]]\nsignal = \"bus\"\ndata_arc = \"A->B\"\n\
                     drivers = [{ part = \"U10\", from = \"q\", when = \"b_out\" }]\n";
        let top = design([WHEN[0], ""], "")
            .replace("{ part = \"U11\", from = \"b_q\" },\n", "")
            .replace("{ ref = \"U2\", q = \"b_q\" },\n", "")
            + "[[include]]\nfile = \"board.toml\"\nprefix = \"b_\"\n\
               connect = { bus = \"bus\", q = \"a_q\" }\n\
               [[microstep]]\nname = \"both\"\non = [\"a_out\", \"b_out\"]\n";
        let reader = InMemory(vec![("board.toml".into(), board.into())]);
        let c = Design::check(
            Source::new("t.toml", top.clone()),
            &Library::builtin(),
            &reader,
        );
        let lints: Vec<_> = c.findings.iter().map(|f| f.lint).collect();
        assert_eq!(lints, [Lint::BusContention], "{:?}", c.findings);
        let m = &c.findings[0].located.message;
        assert!(
            m.contains("b_U10") && m.contains("U10 (when \"a_out\")"),
            "{m}"
        );
        assert_eq!(c.findings[0].located.file, "t.toml");
    }

    #[test]
    fn microsteps_belong_to_the_top_design() {
        let board = "[design]\nname = \"board\"\n\
                     [[microstep]]\nname = \"s0\"\non = [\"x\"]\n";
        let top = design(["", ""], "") + "[[include]]\nfile = \"board.toml\"\n";
        let reader = InMemory(vec![("board.toml".into(), board.into())]);
        let c = Design::check(Source::new("t.toml", top), &Library::builtin(), &reader);
        assert_eq!(c.findings.len(), 1);
        assert_eq!(c.findings[0].lint, Lint::Load);
        assert!(c.findings[0].located.message.contains("[[microstep]]"));
    }
}

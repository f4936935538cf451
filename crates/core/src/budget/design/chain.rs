//! Short arc strings (`chains = ["ir_q -> U21 ADDR->D -> rom_d"]`): signals and part arcs
//! between arrows, each word located in the file so later checks point at it.
//!
//! ```text
//! chain   = signals ( "->" PART ARC "->" signals )+
//! signals = SIGNAL ( "," SIGNAL )*
//! ```
//! Every signal of a group feeds the part arc that follows it, which drives every signal of the
//! next group. Arrows between steps stand alone (spaces around them); an arc's own arrow
//! (`ADDR->D`) does not.

use std::ops::Range;

use toml::Spanned;

use crate::diag::{Source, SourceError};

/// The form every chain error shows as its fix.
const FORM: &str = "write a chain as \"SIGNAL -> PART ARC -> SIGNAL\", e.g. \"ir_q -> U21 ADDR->D -> rom_d\"; several signals with commas (\"b_x, a_q -> U3 AB->S -> alu_lo\"), several steps in a row (\"ctl -> U24 A->Y -> bus_sel -> U10 OE->B -> bus\")";

/// One arc of a chain.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct ChainArc {
    pub from: Spanned<String>,
    pub part: Spanned<String>,
    pub arc: Spanned<String>,
    pub to: Spanned<String>,
}

/// A word of the chain and where it is in the file.
#[derive(Clone, Debug)]
struct Word {
    text: String,
    span: Range<usize>,
}

impl Word {
    fn spanned(&self) -> Spanned<String> {
        Spanned::new(self.span.clone(), self.text.clone())
    }
}

/// The words of a chain: runs of characters other than white space and commas; a comma is a
/// word of its own. Spans are the words' places in the file when the string is written without
/// escapes (else the whole string's span).
fn words(src: &Source, s: &Spanned<String>) -> Vec<Word> {
    let whole = s.span();
    let value = s.get_ref();
    let literal = src.text.get(whole.clone()).is_some_and(|raw| {
        raw.len() == value.len() + 2
            && (raw.starts_with('"') || raw.starts_with('\''))
            && &raw[1..raw.len() - 1] == value
    });
    let at = |a: usize, b: usize| {
        if literal {
            whole.start + 1 + a..whole.start + 1 + b
        } else {
            whole.clone()
        }
    };
    let mut out = Vec::new();
    let mut start: Option<usize> = None;
    for (i, c) in value.char_indices() {
        if c.is_whitespace() || c == ',' {
            if let Some(s0) = start.take() {
                out.push(Word {
                    text: value[s0..i].to_string(),
                    span: at(s0, i),
                });
            }
            if c == ',' {
                out.push(Word {
                    text: ",".into(),
                    span: at(i, i + 1),
                });
            }
        } else if start.is_none() {
            start = Some(i);
        }
    }
    if let Some(s0) = start {
        out.push(Word {
            text: value[s0..].to_string(),
            span: at(s0, value.len()),
        });
    }
    out
}

/// Parse one chain into its arcs, in the order written.
pub(super) fn parse(src: &Source, s: &Spanned<String>) -> Result<Vec<ChainArc>, Box<SourceError>> {
    let fail = |span: Range<usize>, msg: String, label: &str| {
        Box::new(src.error(span, msg, label, Some(FORM.into())))
    };
    let words = words(src, s);
    if words.is_empty() {
        return Err(fail(s.span(), "empty chain".into(), "nothing here"));
    }
    // segments between the standalone arrows
    let mut segments: Vec<Vec<Word>> = vec![Vec::new()];
    let mut arrows: Vec<Range<usize>> = Vec::new();
    for w in words {
        if w.text == "->" {
            arrows.push(w.span.clone());
            segments.push(Vec::new());
        } else {
            segments.last_mut().expect("one segment at least").push(w);
        }
    }
    if arrows.is_empty() {
        let glued = segments[0].iter().any(|w| w.text.contains("->"));
        return Err(fail(
            s.span(),
            format!(
                "chain \"{}\" has no arrow between steps: expected SIGNAL -> PART ARC -> SIGNAL{}",
                s.get_ref(),
                if glued {
                    " (put spaces around the arrows between steps)"
                } else {
                    ""
                }
            ),
            "no \" -> \" here",
        ));
    }
    let mut groups: Vec<Vec<Spanned<String>>> = Vec::new();
    let mut steps: Vec<(Spanned<String>, Spanned<String>)> = Vec::new();
    for (i, seg) in segments.iter().enumerate() {
        // the place of a missing piece: just after the arrow before it, or before the one after
        let near = if i > 0 {
            arrows[i - 1].clone()
        } else {
            arrows[0].clone()
        };
        if i % 2 == 0 {
            groups.push(signal_group(seg, near, &fail)?);
        } else {
            steps.push(part_arc(seg, near, &fail)?);
        }
    }
    if segments.len().is_multiple_of(2) {
        let (_, arc) = steps.last().expect("an even count has a step last");
        return Err(fail(
            arc.span(),
            format!(
                "the chain ends after \"{}\": expected \"-> SIGNAL\" (the signal this arc drives)",
                arc.get_ref()
            ),
            "no signal after this arc",
        ));
    }
    let mut out = Vec::new();
    for (k, (part, arc)) in steps.into_iter().enumerate() {
        for from in &groups[k] {
            for to in &groups[k + 1] {
                out.push(ChainArc {
                    from: from.clone(),
                    part: part.clone(),
                    arc: arc.clone(),
                    to: to.clone(),
                });
            }
        }
    }
    Ok(out)
}

/// A clock buffer written short, `"U30 A->Y"`: a part reference and one of its arcs.
pub(super) fn part_and_arc(
    src: &Source,
    s: &Spanned<String>,
) -> Result<(Spanned<String>, Spanned<String>), Box<SourceError>> {
    match words(src, s).as_slice() {
        [p, a] if p.text != "," && a.text != "," => Ok((p.spanned(), a.spanned())),
        _ => Err(Box::new(src.error(
            s.span(),
            format!(
                "expected \"PART ARC\" (a part reference and its arc), found \"{}\"",
                s.get_ref()
            ),
            "not a part and an arc",
            Some(
                "write a clock buffer as \"U30 A->Y\" or { part = \"U30\", arc = \"A->Y\" }".into(),
            ),
        ))),
    }
}

type Fail<'f> = &'f dyn Fn(Range<usize>, String, &str) -> Box<SourceError>;

/// Signal names separated by commas.
fn signal_group(
    seg: &[Word],
    near: Range<usize>,
    fail: Fail,
) -> Result<Vec<Spanned<String>>, Box<SourceError>> {
    if seg.is_empty() {
        return Err(fail(
            near,
            "expected a signal name next to this arrow".into(),
            "no signal here",
        ));
    }
    let mut out = Vec::new();
    let mut want_name = true;
    for w in seg {
        match (want_name, w.text == ",") {
            (true, false) => {
                if w.text.contains("->") {
                    return Err(fail(
                        w.span.clone(),
                        format!(
                            "\"{}\" is not a signal name: put spaces around the arrows between steps",
                            w.text
                        ),
                        "arrow without spaces",
                    ));
                }
                out.push(w.spanned());
                want_name = false;
            }
            (false, true) => want_name = true,
            (true, true) => {
                return Err(fail(
                    w.span.clone(),
                    "expected a signal name, found \",\"".into(),
                    "a comma with no signal before it",
                ));
            }
            (false, false) => {
                return Err(fail(
                    w.span.clone(),
                    format!(
                        "expected \"->\" or \",\" after signal \"{}\", found \"{}\"",
                        out.last().map_or("", |s: &Spanned<String>| s.get_ref()),
                        w.text
                    ),
                    "expected an arrow or a comma before this",
                ));
            }
        }
    }
    if want_name {
        let last = seg.last().expect("not empty");
        return Err(fail(
            last.span.clone(),
            "expected a signal name after \",\"".into(),
            "nothing after this comma",
        ));
    }
    Ok(out)
}

/// A part reference and one of its arcs, two words.
fn part_arc(
    seg: &[Word],
    near: Range<usize>,
    fail: Fail,
) -> Result<(Spanned<String>, Spanned<String>), Box<SourceError>> {
    match seg {
        [p, a] if p.text != "," && a.text != "," => Ok((p.spanned(), a.spanned())),
        [] => Err(fail(
            near,
            "expected PART ARC (e.g. \"U21 ADDR->D\") after this arrow, found nothing".into(),
            "no part arc after this",
        )),
        [one] => Err(fail(
            one.span.clone(),
            format!(
                "expected PART ARC (e.g. \"U21 ADDR->D\") between the arrows, found only \"{}\"",
                one.text
            ),
            "a part reference and its arc are two words",
        )),
        _ => {
            let span = seg[0].span.start..seg[seg.len() - 1].span.end;
            let text: Vec<&str> = seg.iter().map(|w| w.text.as_str()).collect();
            Err(fail(
                span,
                format!(
                    "expected PART ARC (two words, e.g. \"U21 ADDR->D\") between the arrows, found \"{}\"",
                    text.join(" ")
                ),
                "not a part and an arc",
            ))
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A chain written as the value of `c = "…"` in a one-line file.
    fn chain(text: &str) -> (Source, Spanned<String>) {
        let file = format!("c = \"{text}\"\n");
        let src = Source::new("t.toml", file);
        (src, Spanned::new(4..6 + text.len(), text.to_string()))
    }

    fn arcs(text: &str) -> Vec<(String, String, String, String)> {
        let (src, s) = chain(text);
        parse(&src, &s)
            .unwrap()
            .into_iter()
            .map(|a| {
                (
                    a.from.into_inner(),
                    a.part.into_inner(),
                    a.arc.into_inner(),
                    a.to.into_inner(),
                )
            })
            .collect()
    }

    fn t(a: &str, p: &str, arc: &str, b: &str) -> (String, String, String, String) {
        (a.into(), p.into(), arc.into(), b.into())
    }

    #[test]
    fn one_arc_several_steps_and_fan_in() {
        assert_eq!(
            arcs("ir_q -> U21 ADDR->D -> rom_d"),
            vec![t("ir_q", "U21", "ADDR->D", "rom_d")]
        );
        assert_eq!(
            arcs("ctl -> U24 A->Y -> bus_sel -> U10 OE->B -> bus"),
            vec![
                t("ctl", "U24", "A->Y", "bus_sel"),
                t("bus_sel", "U10", "OE->B", "bus")
            ]
        );
        assert_eq!(
            arcs("b_x,a_q -> U3 AB->S -> lo ,hi"),
            vec![
                t("b_x", "U3", "AB->S", "lo"),
                t("b_x", "U3", "AB->S", "hi"),
                t("a_q", "U3", "AB->S", "lo"),
                t("a_q", "U3", "AB->S", "hi")
            ]
        );
    }

    #[test]
    fn words_are_located_in_the_file() {
        let (src, s) = chain("ir_q -> U21 ADDR->D -> rom_d");
        let a = &parse(&src, &s).unwrap()[0];
        assert_eq!(&src.text[a.part.span()], "U21");
        assert_eq!(&src.text[a.arc.span()], "ADDR->D");
        assert_eq!(&src.text[a.to.span()], "rom_d");
        assert_eq!(src.line_col(a.arc.span().start), (1, 18));
    }

    fn error(text: &str) -> (String, String) {
        let (src, s) = chain(text);
        let e = parse(&src, &s).unwrap_err();
        assert!(
            e.help
                .as_deref()
                .is_some_and(|h| h.contains("SIGNAL -> PART ARC"))
        );
        let (_, col) = (e.line, e.column);
        let at: String = src.text.chars().skip(col - 1).take(8).collect();
        (e.message.clone(), at)
    }

    #[test]
    fn each_mistake_is_named_where_it_is() {
        let (m, _) = error("");
        assert_eq!(m, "empty chain");
        let (m, _) = error("a b");
        assert!(m.contains("has no arrow"), "{m}");
        let (m, at) = error("a -> U1 -> b");
        assert!(m.contains("found only \"U1\""), "{m}");
        assert!(at.starts_with("U1"), "{at}");
        let (m, at) = error("a -> U21 ADDR->D");
        assert!(m.contains("ends after \"ADDR->D\""), "{m}");
        assert!(at.starts_with("ADDR->D"), "{at}");
        let (m, at) = error("a U21 ADDR->D -> b");
        assert!(m.contains("after signal \"a\", found \"U21\""), "{m}");
        assert!(at.starts_with("U21"), "{at}");
        let (m, at) = error("ir_q->U21 ADDR->D->rom_d");
        assert!(m.contains("has no arrow"), "{m}");
        assert!(at.starts_with('"'), "{at}");
        let (m, at) = error("q -> U1 A->Y -> x->y");
        assert!(m.contains("put spaces around the arrows"), "{m}");
        assert!(at.starts_with("x->y"), "{at}");
        let (m, _) = error("a, -> U1 A->Y -> b");
        assert!(m.contains("after \",\""), "{m}");
        let (m, _) = error("-> U1 A->Y -> b");
        assert!(m.contains("expected a signal name"), "{m}");
        let (m, at) = error("a -> U1 A ->Y -> b");
        assert!(
            m.contains("found \"U1 A ->Y\"") || m.contains("two words"),
            "{m}"
        );
        assert!(at.starts_with("U1"), "{at}");
        let (m, _) = error("a -> -> b");
        assert!(m.contains("found nothing"), "{m}");
    }

    #[test]
    fn an_escaped_string_points_at_the_whole_value() {
        let src = Source::new("t.toml", "c = \"a -> U1 A->Y -> \\u0062\"\n");
        let s = Spanned::new(4..27, "a -> U1 A->Y -> b".to_string());
        let a = &parse(&src, &s).unwrap()[0];
        assert_eq!(a.to.span(), 4..27);
    }
}

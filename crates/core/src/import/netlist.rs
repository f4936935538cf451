//! A KiCad netlist (`.net`, the S-expression export of the schematic editor) as components and
//! nets, read with the `lexpr` S-expression parser. Only what an import needs is read: each
//! component's reference, value and sheet, each net's name and its (reference, pin) nodes;
//! every other field is ignored. Errors are located with file:line:column. (lexpr's
//! span-keeping reader takes time growing with the square of the file's size, its plain reader
//! does not: the plain one is used, and a missing field is located at the `(comp` or `(net`
//! that lacks it by counting those words in the text.)

use lexpr::Value;

use crate::diag::{Source, SourceError};

/// The parts of a netlist an import reads.
#[derive(Clone, Debug, Default, PartialEq)]
pub struct Netlist {
    /// The components, in file order.
    pub components: Vec<Component>,
    /// The nets, in file order.
    pub nets: Vec<Net>,
}

/// One component.
#[derive(Clone, Debug, PartialEq)]
pub struct Component {
    /// Reference designator, e.g. "U12".
    pub reference: String,
    /// Its value field, e.g. "74HC574" or "SN74HC574N".
    pub value: String,
    /// The sheet it is drawn on ("/" for the root sheet, "/alu/" for a sheet named alu).
    pub sheet: String,
}

/// One net.
#[derive(Clone, Debug, PartialEq)]
pub struct Net {
    /// Its name, e.g. "/CLK" or "Net-(U1-Pad3)".
    pub name: String,
    /// The pins on it.
    pub nodes: Vec<Node>,
}

/// A pin on a net.
#[derive(Clone, Debug, PartialEq)]
pub struct Node {
    /// The component's reference.
    pub reference: String,
    /// The pin number as the netlist gives it ("11").
    pub pin: String,
}

/// Byte offset of a 1-based line and a 0-based byte column.
fn offset(text: &str, line: usize, column: usize) -> usize {
    let start: usize = text
        .split_inclusive('\n')
        .take(line.saturating_sub(1))
        .map(str::len)
        .sum();
    (start + column).min(text.len())
}

/// The error at the `k`-th (from 0) occurrence of `word` in the text.
fn at(src: &Source, word: &str, k: usize, msg: String, help: &str) -> Box<SourceError> {
    let a = src.text.match_indices(word).nth(k).map_or(0, |(i, _)| i);
    src.fail(
        a..a + word.len().min(src.text.len() - a),
        msg,
        "here",
        Some(help.into()),
    )
}

/// The head symbol of a list, `comp` of `(comp (ref "U1") …)`.
fn head(r: &Value) -> Option<&str> {
    r.list_iter()?.next()?.as_symbol()
}

/// The text of an atom: a string, a symbol or a number.
fn atom(v: &Value) -> Option<String> {
    v.as_str()
        .or_else(|| v.as_symbol())
        .map(str::to_string)
        .or_else(|| v.as_number().map(|n| n.to_string()))
}

/// The lists inside a list (after its head) whose head is `name`.
fn fields<'a>(r: &'a Value, name: &'a str) -> impl Iterator<Item = &'a Value> + 'a {
    r.list_iter()
        .into_iter()
        .flatten()
        .skip(1)
        .filter(move |c| head(c) == Some(name))
}

/// The value of the field `(name VALUE)` of a list.
fn field_text(r: &Value, name: &str) -> Option<String> {
    let f = fields(r, name).next()?;
    let v = f.list_iter()?.nth(1)?;
    atom(v)
}

/// Deepest list nesting read (a netlist nests about six deep); deeper input is refused before
/// the reader, whose recursion it would otherwise drive.
const MAX_DEPTH: usize = 64;

/// The byte offset where lists first nest deeper than [`MAX_DEPTH`], outside strings.
fn too_deep(text: &str) -> Option<usize> {
    let (mut depth, mut in_str, mut escaped) = (0usize, false, false);
    for (i, c) in text.char_indices() {
        match (in_str, escaped, c) {
            (true, true, _) => escaped = false,
            (true, false, '\\') => escaped = true,
            (true, false, '"') => in_str = false,
            (false, _, '"') => in_str = true,
            (false, _, '(') => {
                depth += 1;
                if depth > MAX_DEPTH {
                    return Some(i);
                }
            }
            (false, _, ')') => depth = depth.saturating_sub(1),
            _ => {}
        }
    }
    None
}

/// Read a netlist.
pub fn parse(src: &Source) -> Result<Netlist, Box<SourceError>> {
    if let Some(at) = too_deep(&src.text) {
        return Err(src.fail(
            at..at + 1,
            format!("lists nest deeper than {MAX_DEPTH} here: not a netlist"),
            "here",
            Some("give the .net file the schematic editor exports in KiCad format".into()),
        ));
    }
    let top = lexpr::from_str(&src.text).map_err(|e| {
        let (line, column) = e
            .location()
            .map_or((1, 1), |l| (l.line(), l.column().max(1)));
        let a = offset(&src.text, line, column - 1);
        src.fail(
            a..a,
            format!("not a readable S-expression: {e}"),
            "here",
            Some(
                "export the netlist again from the schematic editor (File → Export → Netlist, KiCad format); a truncated or hand-edited file ends early or has an unbalanced parenthesis or quote".into(),
            ),
        )
    })?;
    if head(&top) != Some("export") {
        let first = src.text.trim_start();
        let k = src.text.len() - first.len();
        return Err(src.fail(
            k..k + first.find(char::is_whitespace).unwrap_or(first.len()),
            "not a KiCad netlist: it does not start with (export …)",
            "here",
            Some("give the .net file the schematic editor exports in KiCad format".into()),
        ));
    }
    let mut out = Netlist::default();
    let (mut comp_k, mut net_k) = (0, 0);
    for list in fields(&top, "components") {
        for c in fields(list, "comp") {
            let reference = field_text(c, "ref").ok_or_else(|| {
                at(
                    src,
                    "(comp ",
                    comp_k,
                    "a (comp …) without (ref …)".into(),
                    "every component needs its reference designator",
                )
            })?;
            comp_k += 1;
            let value = field_text(c, "value").unwrap_or_default();
            let sheet = fields(c, "sheetpath")
                .next()
                .and_then(|s| field_text(s, "names"))
                .unwrap_or_else(|| "/".into());
            out.components.push(Component {
                reference,
                value,
                sheet,
            });
        }
    }
    for list in fields(&top, "nets") {
        for n in fields(list, "net") {
            let name = field_text(n, "name").ok_or_else(|| {
                at(
                    src,
                    "(net ",
                    net_k,
                    "a (net …) without (name …)".into(),
                    "every net needs its name",
                )
            })?;
            net_k += 1;
            let mut nodes = Vec::new();
            for node in fields(n, "node") {
                match (field_text(node, "ref"), field_text(node, "pin")) {
                    (Some(reference), Some(pin)) => nodes.push(Node { reference, pin }),
                    _ => {
                        return Err(at(
                            src,
                            &format!("\"{name}\""),
                            0,
                            format!("a (node …) of net \"{name}\" without (ref …) and (pin …)"),
                            "a node names the component and its pin: (node (ref \"U1\") (pin \"3\"))",
                        ));
                    }
                }
            }
            out.nets.push(Net { name, nodes });
        }
    }
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn read(text: &str) -> Result<Netlist, Box<SourceError>> {
        parse(&Source::new("t.net", text))
    }

    const SMALL: &str = r#"(export (version "E")
  (design (source "machine.kicad_sch") (tool "Eeschema 8.0"))
  (components
    (comp (ref "U1") (value "74HC574") (footprint "Package_DIP:DIP-20_W7.62mm")
      (fields (field (name "Footprint") "x"))
      (sheetpath (names "/alu/") (tstamps "/1234/")))
    (comp (ref "R1") (value "10k \"pull\\up\"")))
  (libparts (libpart (lib "74xx") (part "74HC574")))
  (nets
    (net (code "1") (name "/CLK") (class "Default")
      (node (ref "U1") (pin "11") (pinfunction "CLK") (pintype "input")))
    (net (code 2) (name "GND") (node (ref "U1") (pin 10)))))
"#;

    #[test]
    fn components_and_nets_with_escapes_nesting_and_unknown_fields() {
        let n = read(SMALL).unwrap();
        assert_eq!(n.components.len(), 2);
        assert_eq!(n.components[0].sheet, "/alu/");
        assert_eq!(n.components[1].value, "10k \"pull\\up\"");
        assert_eq!(n.components[1].sheet, "/");
        assert_eq!(n.nets[0].name, "/CLK");
        assert_eq!(
            n.nets[0].nodes,
            vec![Node {
                reference: "U1".into(),
                pin: "11".into()
            }]
        );
        // unquoted numbers are read as their text
        assert_eq!(n.nets[1].nodes[0].pin, "10");
    }

    #[test]
    fn a_truncated_or_foreign_file_is_a_located_error() {
        let cut = &SMALL[..SMALL.find("(net (code 2)").unwrap()];
        let e = read(cut).unwrap_err();
        assert!(
            e.message.contains("not a readable S-expression"),
            "{}",
            e.message
        );
        assert!(e.line >= 10, "line {}", e.line);
        let e = read("(kicad_sch (version 2023))").unwrap_err();
        assert!(
            e.message.contains("does not start with (export"),
            "{}",
            e.message
        );
        assert_eq!((e.line, e.column), (1, 1));
        let e = read("(export\n  (components (comp (value \"74HC04\"))))").unwrap_err();
        assert!(e.message.contains("without (ref"), "{}", e.message);
        assert_eq!((e.line, e.column), (2, 15));
        let e = read("(export (nets (net (name \"A\") (node (ref \"U1\")))))").unwrap_err();
        assert!(e.message.contains("of net \"A\" without"), "{}", e.message);
        let deep = format!("(export {}", "(".repeat(100_000));
        let e = read(&deep).unwrap_err();
        assert!(e.message.contains("nest deeper than 64"), "{}", e.message);
        let e = read("(export \"unterminated)").unwrap_err();
        assert!(e.message.contains("not a readable"), "{}", e.message);
    }
}

//! Tables as the reports print them: aligned text columns, or Markdown pipe tables.

use std::fmt::Write;

/// Columns aligned with `indent` spaces before each line (the last column is not padded).
pub fn text(out: &mut String, indent: usize, head: &[&str], rows: &[Vec<String>]) {
    let width: Vec<usize> = (0..head.len())
        .map(|i| {
            rows.iter()
                .map(|c| c.get(i).map_or(0, |s| s.chars().count()))
                .chain(std::iter::once(head[i].chars().count()))
                .max()
                .unwrap_or(0)
        })
        .collect();
    let line = |out: &mut String, cols: &[String]| {
        let mut s = " ".repeat(indent);
        for (i, c) in cols.iter().enumerate() {
            if i > 0 {
                s.push_str("  ");
            }
            s.push_str(c);
            if i + 1 < cols.len() {
                let pad = width[i].saturating_sub(c.chars().count());
                s.push_str(&" ".repeat(pad));
            }
        }
        let _ = writeln!(out, "{}", s.trim_end());
    };
    line(out, &head.iter().map(|s| s.to_string()).collect::<Vec<_>>());
    for r in rows {
        line(out, r);
    }
}

/// A Markdown pipe-table cell: pipes escaped, line breaks as spaces.
pub fn md_cell(s: &str) -> String {
    s.replace('|', "\\|").replace('\n', " ")
}

/// A Markdown pipe table (a blank line before and after).
pub fn markdown(out: &mut String, head: &[&str], rows: &[Vec<String>]) {
    let _ = writeln!(out);
    let _ = writeln!(
        out,
        "| {} |",
        head.iter()
            .map(|h| md_cell(h))
            .collect::<Vec<_>>()
            .join(" | ")
    );
    let _ = writeln!(
        out,
        "|{}",
        head.iter().map(|_| " --- |").collect::<String>()
    );
    for r in rows {
        let cells: Vec<String> = r.iter().map(|c| md_cell(c)).collect();
        let _ = writeln!(out, "| {} |", cells.join(" | "));
    }
    let _ = writeln!(out);
}

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
/// A value and its uncertainty in one unit (the value's prefix).
pub use slackmeter_core::units::pm;

#[cfg(test)]
mod tests {
    use super::pm;

    // Rounding rule: the uncertainty to two significant digits and the value to the same
    // decimal place (GUM, JCGM 100:2008, 7.2.6; from memory).
    #[test]
    fn value_and_uncertainty_share_one_unit() {
        assert_eq!(pm(2.0e6, 1.686, "Hz"), "2.0000000 MHz ± 0.0000017 MHz");
        assert_eq!(pm(250e-9, 0.8e-9, "s"), "250.00 ns ± 0.80 ns");
        assert_eq!(pm(250e-9, 8e-9, "s"), "250.0 ns ± 8.0 ns");
        assert_eq!(pm(1.5e6, 20e3, "Hz"), "1.500 MHz ± 0.020 MHz");
        assert_eq!(pm(-3e-9, 1e-9, "s"), "-3.000 ns ± 1.000 ns");
    }
}

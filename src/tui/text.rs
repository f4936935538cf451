//! Text that fits: the shortest form of a value that fits a width (never cut inside a number),
//! word wrapping, and rows kept by priority when a panel is short.

use ratatui::style::Style;
use ratatui::text::{Line, Span};

/// Width of a text in terminal cells (one per character: the view uses no wide characters).
pub fn width_of(s: &str) -> usize {
    s.chars().count()
}

/// The first of `variants` (longest first) that fits `width`; else the last one shortened at a
/// space, with "…" (a number is never cut in two).
pub fn fit(variants: &[String], width: usize) -> String {
    if let Some(v) = variants.iter().find(|v| width_of(v) <= width) {
        return v.clone();
    }
    let last = variants.last().map_or("", |s| s.as_str());
    let mut out = String::new();
    for word in last.split(' ') {
        let next = if out.is_empty() {
            word.to_string()
        } else {
            format!("{out} {word}")
        };
        if width_of(&next) + 1 > width {
            break;
        }
        out = next;
    }
    out.push('…');
    out
}

/// Words of `text` in lines of at most `width` characters (a longer word is split).
pub fn wrap(text: &str, width: usize) -> Vec<String> {
    let width = width.max(1);
    let mut lines = Vec::new();
    let mut cur = String::new();
    for word in text.split_whitespace() {
        let mut word = word.to_string();
        while width_of(&word) > width {
            if !cur.is_empty() {
                lines.push(std::mem::take(&mut cur));
            }
            let head: String = word.chars().take(width).collect();
            word = word.chars().skip(width).collect();
            lines.push(head);
        }
        if cur.is_empty() {
            cur = word;
        } else if width_of(&cur) + 1 + width_of(&word) <= width {
            cur.push(' ');
            cur.push_str(&word);
        } else {
            lines.push(std::mem::replace(&mut cur, word));
        }
    }
    if !cur.is_empty() || lines.is_empty() {
        lines.push(cur);
    }
    lines
}

/// One row of a panel: its priority (0 is kept longest) and what it shows.
pub struct Row {
    /// Priority: 0 is kept longest.
    pub prio: u8,
    /// What it shows.
    pub line: Line<'static>,
}

/// A row of one style.
pub fn row(prio: u8, text: String, style: Style) -> Row {
    Row {
        prio,
        line: Line::from(Span::styled(text, style)),
    }
}

/// The rows that fit `n` lines: the lowest priorities give way first; order is kept.
pub fn by_priority(rows: Vec<Row>, n: usize) -> Vec<Line<'static>> {
    let mut keep: Vec<(usize, u8)> = rows.iter().enumerate().map(|(i, r)| (i, r.prio)).collect();
    keep.sort_by_key(|&(i, p)| (p, i));
    keep.truncate(n);
    let mut idx: Vec<usize> = keep.into_iter().map(|(i, _)| i).collect();
    idx.sort_unstable();
    let mut rows: Vec<Option<Row>> = rows.into_iter().map(Some).collect();
    idx.into_iter()
        .filter_map(|i| rows[i].take().map(|r| r.line))
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn fit_never_cuts_a_number() {
        let v = vec![
            "frequency 500.0 kHz ± 19.67 mHz".to_string(),
            "freq 500.0 kHz".into(),
        ];
        assert_eq!(fit(&v, 40), v[0]);
        assert_eq!(fit(&v, 20), "freq 500.0 kHz");
        assert_eq!(fit(&v, 12), "freq 500.0…");
        assert_eq!(wrap("one two three", 7), vec!["one two", "three"]);
    }
}

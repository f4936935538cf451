//! The time-resolved session as a table (text or Markdown): the series' intervals merged into
//! at most [`ROWS`] rows, each with its frequency, worst high and low time, lowest rail, glitches
//! and faults, and, with a margin, the least slack of each phase against the worst-case budget.

use std::fmt::Write;

use slackmeter_core::margin::{IntervalSlack, Margin};
use slackmeter_core::measure::{Series, SeriesPoint};
use slackmeter_core::units::{hz, ns};

use super::table;

/// Most rows a table shows (the JSON document has every interval).
pub const ROWS: usize = 24;

/// One row: a run of consecutive intervals.
struct Row {
    from_s: f64,
    to_s: f64,
    freq: Option<(f64, f64)>,
    high_min_ns: Option<f64>,
    low_min_ns: Option<f64>,
    rail: Option<(usize, f64)>,
    glitches: u64,
    stalls: u64,
    faults: u32,
    below_s: f64,
    slack: Option<[f64; 3]>,
    notes: Vec<&'static str>,
}

fn min_opt(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    match (a, b) {
        (Some(x), Some(y)) => Some(x.min(y)),
        (x, y) => x.or(y),
    }
}

fn row(points: &[SeriesPoint], slack: &[&IntervalSlack], m: Option<&Margin>) -> Row {
    let mut r = Row {
        from_s: points[0].from_s,
        to_s: points[points.len() - 1].to_s,
        freq: None,
        high_min_ns: None,
        low_min_ns: None,
        rail: None,
        glitches: 0,
        stalls: 0,
        faults: 0,
        below_s: 0.0,
        slack: None,
        notes: Vec::new(),
    };
    for p in points {
        if let Some(f) = p.frequency_hz {
            r.freq = Some(r.freq.map_or((f, f), |(a, b)| (a.min(f), b.max(f))));
        }
        r.high_min_ns = min_opt(r.high_min_ns, p.high_min_ns);
        r.low_min_ns = min_opt(r.low_min_ns, p.low_min_ns);
        if let Some(l) = p.lowest_rail()
            && r.rail.is_none_or(|x| l.1 < x.1)
        {
            r.rail = Some(l);
        }
        r.glitches += p.glitches;
        r.stalls += p.stalls;
        r.faults += p.fault_rises;
        r.below_s += p.rail_below_s.iter().sum::<f64>();
    }
    for i in slack {
        let s = [i.low_slack_ns, i.high_slack_ns, i.period_slack_ns];
        r.slack = Some(match r.slack {
            Some(x) => [x[0].min(s[0]), x[1].min(s[1]), x[2].min(s[2])],
            None => s,
        });
    }
    if let Some(m) = m {
        let inside = |t: f64| t >= r.from_s && t < r.to_s;
        if m.judged.basis != slackmeter_core::margin::Basis::Session && inside(m.judged.from_s) {
            r.notes.push("judged");
        }
        if m.highest_clean_at_s.is_some_and(inside) {
            r.notes.push("highest clean");
        }
        if m.failure.as_ref().is_some_and(|f| inside(f.onset.at_s)) {
            r.notes.push("failure");
        } else if !slack.is_empty()
            && slack.iter().all(|i| {
                i.trouble
                    .contains(&slackmeter_core::margin::Trouble::AfterFailure)
            })
        {
            r.notes.push("after the failure");
        }
    }
    r
}

fn rows(series: &Series, m: Option<&Margin>) -> Vec<Row> {
    let pts = &series.points;
    let n = pts.len();
    let k = n.min(ROWS);
    (0..k)
        .filter_map(|g| {
            let (a, b) = (g * n / k, (g + 1) * n / k);
            let group = &pts[a..b];
            let (from, to) = (group.first()?.from_s, group.last()?.to_s);
            let slack: Vec<&IntervalSlack> = m
                .map(|m| {
                    m.intervals
                        .iter()
                        .filter(|i| i.from_s >= from && i.from_s < to)
                        .collect()
                })
                .unwrap_or_default();
            Some(row(group, &slack, m))
        })
        .collect()
}

fn cells(r: &Row, series: &Series) -> Vec<String> {
    let freq = match r.freq {
        Some((a, b)) if (b - a) > 1e-4 * b => format!("{} … {}", hz(a), hz(b)),
        Some((a, _)) => hz(a).to_string(),
        None => "—".into(),
    };
    let t = |v: Option<f64>| v.map_or("—".into(), |x| ns(x).to_string());
    let rail = r.rail.map_or("—".into(), |(i, mv)| {
        format!(
            "{} {:.3} V",
            series.rails.get(i).map_or("?", |s| s.as_str()),
            mv / 1000.0
        )
    });
    let mut trouble = Vec::new();
    if r.glitches > 0 {
        trouble.push(format!("{} glitches", r.glitches));
    }
    if r.stalls > 0 {
        trouble.push(format!("{} stalls", r.stalls));
    }
    if r.faults > 0 {
        trouble.push("fault line".to_string());
    }
    if r.below_s > 0.0 {
        trouble.push(format!("below minimum {:.3} s", r.below_s));
    }
    trouble.extend(r.notes.iter().map(|s| s.to_string()));
    let mut c = vec![
        format!("{:.1}–{:.1} s", r.from_s, r.to_s),
        freq,
        t(r.high_min_ns),
        t(r.low_min_ns),
        rail,
    ];
    if let Some(s) = r.slack {
        c.extend(s.iter().map(|x| format!("{x:+.1} ns")));
    }
    c.push(if trouble.is_empty() {
        "—".into()
    } else {
        trouble.join(", ")
    });
    c
}

fn header(with_slack: bool) -> Vec<&'static str> {
    let mut h = vec![
        "time",
        "frequency",
        "worst high",
        "worst low",
        "lowest rail",
    ];
    if with_slack {
        h.extend(["low slack", "high slack", "period slack"]);
    }
    h.push("problems");
    h
}

fn intro(series: &Series, margin: Option<&Margin>) -> String {
    format!(
        "{} intervals of {:.1} s{}; worst high and low ± one tick{}",
        series.points.len(),
        series.interval_s,
        if series.points.len() > ROWS {
            format!(", merged into {ROWS} rows (least of each row)")
        } else {
            String::new()
        },
        if margin.is_some() {
            "; slack against the worst-case budget at each interval's own rails (period: bounded by worst high + worst low)"
        } else {
            ""
        }
    )
}

/// The series as a text table (empty without intervals).
pub fn render(series: &Series, margin: Option<&Margin>) -> String {
    let mut out = String::new();
    if series.points.is_empty() {
        return out;
    }
    let rows = rows(series, margin);
    let with_slack = rows.iter().any(|r| r.slack.is_some());
    let body: Vec<Vec<String>> = rows.iter().map(|r| cells(r, series)).collect();
    let _ = writeln!(out, "\nOver time: {}", intro(series, margin));
    table::text(&mut out, 2, &header(with_slack), &body);
    out
}

/// The series as a Markdown section (empty without intervals).
pub fn render_markdown(series: &Series, margin: Option<&Margin>) -> String {
    let mut out = String::new();
    if series.points.is_empty() {
        return out;
    }
    let rows = rows(series, margin);
    let with_slack = rows.iter().any(|r| r.slack.is_some());
    let _ = writeln!(out, "\n## Over time\n\n{}.", intro(series, margin));
    let body: Vec<Vec<String>> = rows.iter().map(|r| cells(r, series)).collect();
    table::markdown(&mut out, &header(with_slack), &body);
    out
}

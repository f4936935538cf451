//! The pictures of the live view (`d` cycles them): the clock's frequency, each phase's slack in %
//! of its requirement with zero and the guard band, and each rail's lowest value against its
//! limit, all over the window's time (ratatui's Chart).

use ratatui::Frame;
use ratatui::layout::{Constraint, Rect};
use ratatui::style::Color;
use ratatui::symbols::Marker;
use ratatui::text::Line;
use ratatui::widgets::{Axis, Chart, Dataset, GraphType, Paragraph};

use super::state::{App, Picture};
use super::style::{panel, st};
use super::text::fit;
use crate::units::{hz, ns};

/// (lowest, highest) of `values`, widened so a flat line has room.
fn bounds(values: impl Iterator<Item = f64>) -> Option<[f64; 2]> {
    let (lo, hi) = values
        .filter(|v| v.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), v| {
            (lo.min(v), hi.max(v))
        });
    if !lo.is_finite() {
        return None;
    }
    let pad = ((hi - lo) * 0.1).max(hi.abs() * 1e-6).max(1e-9);
    Some([lo - pad, hi + pad])
}

fn time_axis(t: [f64; 2]) -> Axis<'static> {
    Axis::default()
        .bounds(t)
        .labels([format!("{:.1} s", t[0]), format!("{:.1} s", t[1])])
}

/// Draw the picture chosen.
pub fn picture(f: &mut Frame, app: &App, r: Rect) {
    let Some(s) = &app.snapshot else {
        let block = panel(app, app.picture.name());
        f.render_widget(Paragraph::new("waiting for figures…").block(block), r);
        return;
    };
    let mid = |p: &crate::measure::SeriesPoint| (p.from_s + p.to_s) / 2.0;
    let t = s
        .series
        .points
        .iter()
        .fold(None, |acc: Option<[f64; 2]>, p| {
            Some(acc.map_or([p.from_s, p.to_s], |[a, b]| {
                [a.min(p.from_s), b.max(p.to_s)]
            }))
        })
        .filter(|[a, b]| b > a)
        .unwrap_or([0.0, 1.0]);
    let span = t[1] - t[0];
    let what = match app.picture {
        Picture::Frequency => "frequency".to_string(),
        Picture::Slack => format!(
            "slack in % of need: low, high, period; zero and the {:.0} % guard band",
            app.margin.as_ref().map_or(0.0, |m| m.guard_band * 100.0)
        ),
        Picture::Rails => "each rail's lowest against its limit".to_string(),
        Picture::High | Picture::Low | Picture::Period => format!(
            "{} time histogram, | = what the budget needs",
            app.picture.name()
        ),
    };
    let w = r.width.saturating_sub(4) as usize;
    let title = fit(
        &[
            format!("{what}, last {span:.1} s (d: next picture)"),
            format!("{what}, last {span:.1} s (d)"),
            format!("{}, last {span:.1} s (d)", app.picture.name()),
            format!("{} (d)", app.picture.name()),
        ],
        w,
    );
    let block = panel(app, &title);
    let msg = |text: &str| Paragraph::new(text.to_string()).block(panel(app, &title));
    let color = |c: Color| st(app, c);
    match app.picture {
        Picture::Frequency => {
            let pts: Vec<(f64, f64)> = s
                .series
                .clock_points()
                .filter_map(|p| p.frequency_hz.map(|v| (mid(p), v)))
                .collect();
            let Some(y) = bounds(pts.iter().map(|p| p.1)) else {
                f.render_widget(msg("no clock intervals yet"), r);
                return;
            };
            let data = [Dataset::default()
                .name("frequency")
                .marker(Marker::Braille)
                .graph_type(GraphType::Line)
                .style(color(Color::Cyan))
                .data(&pts)];
            // a steady clock moves in its last digits: the axis is labelled from the middle
            let centre = (y[0] + y[1]) / 2.0;
            let half = (y[1] - y[0]) / 2.0;
            let chart = Chart::new(data.to_vec())
                .block(block)
                .x_axis(time_axis(t))
                .y_axis(Axis::default().bounds(y).labels([
                    format!("−{}", hz(half)),
                    hz(centre).to_string(),
                    format!("+{}", hz(half)),
                ]))
                .hidden_legend_constraints((Constraint::Ratio(0, 1), Constraint::Ratio(0, 1)));
            f.render_widget(chart, r);
        }
        Picture::Slack => {
            let Some(m) = &app.margin else {
                let text = if app.design.is_some() {
                    "waiting for cycles…"
                } else {
                    "slack needs a design (--design)"
                };
                f.render_widget(msg(text), r);
                return;
            };
            let need = |name: &str| {
                m.worst_case
                    .phases
                    .iter()
                    .find(|p| p.phase == name)
                    .map(|p| p.required_ns)
                    .filter(|r| *r > 0.0)
            };
            let series = |name: &str, get: fn(&crate::measure::SeriesPoint) -> Option<f64>| {
                let Some(req) = need(name) else {
                    return Vec::new();
                };
                s.series
                    .clock_points()
                    .filter_map(|p| get(p).map(|v| (mid(p), (v - req) / req * 100.0)))
                    .collect::<Vec<_>>()
            };
            let low = series("low", |p| p.low_min_ns);
            let high = series("high", |p| p.high_min_ns);
            let period = series("period", |p| p.period_min_ns);
            let guard = m.guard_band * 100.0;
            let zero = vec![(t[0], 0.0), (t[1], 0.0)];
            let band = vec![(t[0], guard), (t[1], guard)];
            let Some(y) = bounds(
                low.iter()
                    .chain(&high)
                    .chain(&period)
                    .map(|p| p.1)
                    .chain([0.0, guard]),
            ) else {
                f.render_widget(msg("no clock intervals yet"), r);
                return;
            };
            let data = vec![
                line(app, "zero", Marker::Dot, Color::Red, &zero),
                line(
                    app,
                    format!("guard {guard:.0} %"),
                    Marker::Dot,
                    Color::Yellow,
                    &band,
                ),
                line(app, "low", Marker::Braille, Color::Cyan, &low),
                line(app, "high", Marker::Braille, Color::Magenta, &high),
                line(app, "period", Marker::Braille, Color::Green, &period),
            ];
            let chart = Chart::new(data)
                .block(block)
                .x_axis(time_axis(t))
                .y_axis(
                    Axis::default()
                        .bounds(y)
                        .labels([format!("{:+.0}%", y[0]), format!("{:+.0}%", y[1])]),
                )
                .hidden_legend_constraints((Constraint::Ratio(1, 1), Constraint::Ratio(1, 1)));
            f.render_widget(chart, r);
        }
        Picture::High | Picture::Low | Picture::Period => {
            let (i, phase) = match app.picture {
                Picture::Period => (0, "period"),
                Picture::High => (1, "high"),
                _ => (2, "low"),
            };
            let Some(c) = s.clock() else {
                f.render_widget(msg("no clock yet"), r);
                return;
            };
            let need = app.margin.as_ref().and_then(|m| {
                m.worst_case
                    .phases
                    .iter()
                    .find(|p| p.phase == phase)
                    .map(|p| p.required_ns)
            });
            let bars = bins(&c.histograms[i], r.width.saturating_sub(12) as usize);
            let Some(top) = bars.iter().map(|b| b.1).reduce(f64::max) else {
                f.render_widget(msg("no cycles yet"), r);
                return;
            };
            let Some(x) = bounds(bars.iter().map(|b| b.0).chain(need)) else {
                f.render_widget(msg("no cycles yet"), r);
                return;
            };
            let marker: Vec<(f64, f64)> =
                need.map_or(Vec::new(), |n| vec![(n, 0.0), (n, top * 1.05)]);
            let mut data = vec![
                Dataset::default()
                    .name("cycles")
                    .graph_type(GraphType::Bar)
                    .marker(Marker::Braille)
                    .style(color(Color::Cyan))
                    .data(&bars),
            ];
            if let Some(n) = need {
                data.push(line(
                    app,
                    format!("needs {}", ns(n)),
                    Marker::Braille,
                    Color::Red,
                    &marker,
                ));
            }
            let chart = Chart::new(data)
                .block(block)
                .x_axis(
                    Axis::default()
                        .bounds(x)
                        .labels([ns(x[0]).to_string(), ns(x[1]).to_string()]),
                )
                .y_axis(
                    Axis::default()
                        .bounds([0.0, top * 1.05])
                        .labels(["0".to_string(), format!("{top:.0}")]),
                )
                .hidden_legend_constraints((Constraint::Ratio(1, 1), Constraint::Ratio(1, 1)));
            f.render_widget(chart, r);
        }
        Picture::Rails => {
            let mut sets: Vec<(String, Vec<(f64, f64)>)> = Vec::new();
            for (i, name) in s.series.rails.iter().enumerate() {
                let pts: Vec<(f64, f64)> = s
                    .series
                    .points
                    .iter()
                    .filter_map(|p| {
                        p.rail_min_mv
                            .get(i)
                            .copied()
                            .flatten()
                            .map(|v| (mid(p), v / 1000.0))
                    })
                    .collect();
                sets.push((name.clone(), pts));
            }
            let limits: Vec<(f64, Vec<(f64, f64)>)> = s
                .series
                .rail_limits_mv
                .iter()
                .map(|l| (l / 1000.0, vec![(t[0], l / 1000.0), (t[1], l / 1000.0)]))
                .collect();
            let Some(y) = bounds(
                sets.iter()
                    .flat_map(|s| s.1.iter().map(|p| p.1))
                    .chain(limits.iter().map(|l| l.0)),
            ) else {
                f.render_widget(msg("no rail samples yet"), r);
                return;
            };
            const COLOURS: [Color; 4] = [Color::Cyan, Color::Green, Color::Magenta, Color::Blue];
            let mut data: Vec<Dataset> = Vec::new();
            let mut shown_limits: Vec<f64> = Vec::new();
            for (l, pts) in &limits {
                if shown_limits.iter().any(|x| (x - l).abs() < 1e-6) {
                    continue;
                }
                shown_limits.push(*l);
                data.push(line(
                    app,
                    format!("limit {l:.2} V"),
                    Marker::Dot,
                    Color::Red,
                    pts,
                ));
            }
            for (i, (name, pts)) in sets.iter().enumerate() {
                data.push(
                    Dataset::default()
                        .name(format!("{name} min"))
                        .graph_type(GraphType::Line)
                        .marker(Marker::Braille)
                        .style(color(COLOURS[i % COLOURS.len()]))
                        .data(pts),
                );
            }
            let chart = Chart::new(data)
                .block(block)
                .x_axis(time_axis(t))
                .y_axis(
                    Axis::default()
                        .bounds(y)
                        .labels([format!("{:.2} V", y[0]), format!("{:.2} V", y[1])]),
                )
                .hidden_legend_constraints((Constraint::Ratio(1, 1), Constraint::Ratio(1, 1)));
            f.render_widget(chart, r);
        }
    }
}

/// Tick buckets (ns, cycles) merged into at most `n` bins of equal width (ns at the bin's
/// middle, cycles), so a wide spread still fits the picture.
pub fn bins(buckets: &[(f64, u64)], n: usize) -> Vec<(f64, f64)> {
    let n = n.max(1);
    let (Some(first), Some(last)) = (buckets.first(), buckets.last()) else {
        return Vec::new();
    };
    if buckets.len() <= n {
        return buckets.iter().map(|&(v, c)| (v, c as f64)).collect();
    }
    let (lo, hi) = (first.0, last.0);
    let w = ((hi - lo) / n as f64).max(f64::MIN_POSITIVE);
    let mut out = vec![0.0; n];
    for &(v, c) in buckets {
        let i = (((v - lo) / w) as usize).min(n - 1);
        out[i] += c as f64;
    }
    out.into_iter()
        .enumerate()
        .filter(|(_, c)| *c > 0.0)
        .map(|(i, c)| (lo + (i as f64 + 0.5) * w, c))
        .collect()
}

/// One line of a chart: its legend name, marker, colour (unless colour is off) and points.
fn line<'a>(
    app: &App,
    name: impl Into<Line<'a>>,
    marker: Marker,
    colour: Color,
    data: &'a [(f64, f64)],
) -> Dataset<'a> {
    Dataset::default()
        .name(name)
        .graph_type(GraphType::Line)
        .marker(marker)
        .style(st(app, colour))
        .data(data)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn bins_keep_every_cycle() {
        let b: Vec<(f64, u64)> = (0..100).map(|i| (f64::from(i) * 8.0, 2)).collect();
        let merged = bins(&b, 10);
        assert_eq!(merged.len(), 10);
        assert_eq!(merged.iter().map(|x| x.1).sum::<f64>(), 200.0);
        assert_eq!(bins(&b[..3], 10), vec![(0.0, 2.0), (8.0, 2.0), (16.0, 2.0)]);
    }
}

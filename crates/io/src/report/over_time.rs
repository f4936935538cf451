//! SVG plots of the session over time, from its time-resolved series (plotters, SVG backend):
//! the clock's frequency per interval with its uncertainty and the failure onset marked, each
//! phase's slack against the worst-case budget with zero and the guard band drawn, and each
//! rail's minimum per interval with its limit. Legends sit in a panel beside the data, never
//! on it (`legend`, also used by the supply plot).

use std::path::{Path, PathBuf};

use plotters::coord::Shift;
use plotters::prelude::*;

use slackmeter_core::margin::Margin;
use slackmeter_core::measure::{FaultOnset, Series};

/// A curve: its name, colour and (time s, value) points.
type Curve = (&'static str, RGBColor, Vec<(f64, f64)>);
/// A rail: its name, rated minimum V and (time s, minimum V) points.
type RailCurve = (String, f64, Vec<(f64, f64)>);

/// Width of the plot and of the legend panel beside it, px.
const PLOT_W: u32 = 760;
const LEGEND_W: u32 = 340;
const H: u32 = 480;

fn err(e: impl std::fmt::Display) -> std::io::Error {
    std::io::Error::other(e.to_string())
}

/// How a legend entry is drawn.
#[derive(Clone, Copy)]
pub(super) enum Key {
    /// A line.
    Line(RGBColor),
    /// A dashed line.
    Dashed(RGBColor),
    /// A filled circle.
    Dot(RGBColor),
    /// A filled triangle.
    Triangle(RGBColor),
    /// A shaded area.
    Area(RGBColor),
    /// Words only.
    Note,
}

/// The legend as a list in its own panel (`area`), one entry a line.
pub(super) fn legend(
    area: &DrawingArea<SVGBackend<'_>, Shift>,
    keys: &[(String, Key)],
) -> std::io::Result<()> {
    let font = ("sans-serif", 14).into_font();
    for (i, (text, key)) in keys.iter().enumerate() {
        let y = 60 + 26 * i as i32;
        let (x0, x1) = (10, 36);
        match *key {
            Key::Line(c) => area
                .draw(&PathElement::new(vec![(x0, y), (x1, y)], c.stroke_width(2)))
                .map_err(err)?,
            Key::Dashed(c) => {
                for k in 0..3 {
                    let a = x0 + 10 * k;
                    area.draw(&PathElement::new(
                        vec![(a, y), (a + 6, y)],
                        c.stroke_width(2),
                    ))
                    .map_err(err)?;
                }
            }
            Key::Dot(c) => area
                .draw(&Circle::new((x0 + 13, y), 5, c.filled()))
                .map_err(err)?,
            Key::Triangle(c) => area
                .draw(&TriangleMarker::new((x0 + 13, y), 7, c.filled()))
                .map_err(err)?,
            Key::Area(c) => area
                .draw(&Rectangle::new(
                    [(x0, y - 7), (x1, y + 7)],
                    c.mix(0.25).filled(),
                ))
                .map_err(err)?,
            Key::Note => {}
        }
        area.draw(&Text::new(text.clone(), (x1 + 8, y - 7), font.clone()))
            .map_err(err)?;
    }
    Ok(())
}

/// A drawing split into the plot and its legend panel.
fn canvas(
    path: &Path,
) -> std::io::Result<(
    DrawingArea<SVGBackend<'_>, Shift>,
    DrawingArea<SVGBackend<'_>, Shift>,
)> {
    super::plots::may_write(path)?;
    let root = SVGBackend::new(path, (PLOT_W + LEGEND_W, H)).into_drawing_area();
    root.fill(&WHITE).map_err(err)?;
    Ok(root.split_horizontally(PLOT_W))
}

/// The range of `v` padded by 8 % (and at least `min_span`).
fn padded(v: impl Iterator<Item = f64>, min_span: f64) -> Option<(f64, f64)> {
    let (lo, hi) = v
        .filter(|x| x.is_finite())
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), x| {
            (a.min(x), b.max(x))
        });
    if !lo.is_finite() {
        return None;
    }
    let span = (hi - lo).max(min_span);
    let mid = 0.5 * (hi + lo);
    let half = 0.5 * span * 1.16;
    Some((mid - half, mid + half))
}

/// The earliest failure the margin lists (glitches, stalls, the fault line, a stopped
/// heartbeat): its kind and time.
fn first_failure(m: &Margin) -> Option<(&'static str, f64)> {
    m.problems
        .iter()
        .filter(|p| p.kind.is_failure())
        .filter_map(|p| Some((p.kind.name(), p.first_s?)))
        .min_by(|a, b| a.1.total_cmp(&b.1))
}

/// Frequency per interval with its uncertainty, the failure onset, the interval judged and
/// the highest clean one.
fn frequency_svg(
    path: &Path,
    series: &Series,
    margin: Option<&Margin>,
    onset: Option<&FaultOnset>,
) -> std::io::Result<bool> {
    let pts: Vec<(f64, f64, f64)> = series
        .clock_points()
        .filter_map(|p| {
            Some((
                p.at_s(),
                p.frequency_hz? / 1e6,
                p.frequency_uncertainty_hz.unwrap_or(0.0) / 1e6,
            ))
        })
        .collect();
    let (Some((t0, t1)), Some((f0, f1))) = (
        padded(pts.iter().map(|p| p.0), 1e-3),
        padded(
            pts.iter()
                .flat_map(|p| [p.1 - p.2, p.1 + p.2])
                .chain(onset.map(|o| o.frequency_hz / 1e6)),
            1e-6,
        ),
    ) else {
        return Ok(false);
    };
    let (plot, side) = canvas(path)?;
    let mut chart = ChartBuilder::on(&plot)
        .caption("Clock frequency over time", ("sans-serif", 22))
        .margin(15)
        .x_label_area_size(45)
        .y_label_area_size(80)
        .build_cartesian_2d(t0..t1, f0..f1)
        .map_err(err)?;
    // enough decimals that neighbouring labels differ, however narrow the span
    let decimals = ((-((f1 - f0) / 5.0).log10()).ceil().max(0.0) as usize + 1).min(9);
    chart
        .configure_mesh()
        .x_desc("probe time, s")
        .y_desc("MHz")
        .y_label_formatter(&|v| format!("{v:.decimals$}"))
        .draw()
        .map_err(err)?;
    let mut keys = vec![(
        format!("interval of {:.1} s, ± uncertainty", series.interval_s),
        Key::Dot(BLUE),
    )];
    chart
        .draw_series(
            pts.iter().map(|&(t, f, u)| {
                PathElement::new(vec![(t, f - u), (t, f + u)], BLUE.stroke_width(1))
            }),
        )
        .map_err(err)?;
    chart
        .draw_series(
            pts.iter()
                .map(|&(t, f, _)| Circle::new((t, f), 2, BLUE.filled())),
        )
        .map_err(err)?;
    if let Some(o) = onset {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(o.at_s, f0), (o.at_s, f1)],
                6,
                4,
                RED.stroke_width(2),
            ))
            .map_err(err)?;
        chart
            .draw_series(std::iter::once(TriangleMarker::new(
                (o.at_s, o.frequency_hz / 1e6),
                8,
                RED.filled(),
            )))
            .map_err(err)?;
        keys.push((
            format!(
                "failure onset ({}) {:.3} s, {:.4} MHz",
                o.cause,
                o.at_s,
                o.frequency_hz / 1e6
            ),
            Key::Triangle(RED),
        ));
    }
    if let Some((what, t)) = margin.filter(|_| onset.is_none()).and_then(first_failure) {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(t, f0), (t, f1)],
                6,
                4,
                RED.stroke_width(2),
            ))
            .map_err(err)?;
        keys.push((format!("first failure ({what}) {t:.3} s"), Key::Dashed(RED)));
    }
    if let Some(m) = margin {
        let at = 0.5 * (m.judged.from_s + m.judged.to_s);
        chart
            .draw_series(std::iter::once(Circle::new(
                (at, m.operating_hz / 1e6),
                6,
                BLACK.filled(),
            )))
            .map_err(err)?;
        keys.push((
            format!("operating point judged, {:.4} MHz", m.operating_hz / 1e6),
            Key::Dot(BLACK),
        ));
        if let (Some(f), Some(t)) = (m.highest_clean_hz, m.highest_clean_at_s) {
            chart
                .draw_series(std::iter::once(Circle::new(
                    (t, f / 1e6),
                    6,
                    GREEN.filled(),
                )))
                .map_err(err)?;
            keys.push((
                format!("highest clean interval, {:.4} MHz", f / 1e6),
                Key::Dot(GREEN),
            ));
        }
    }
    legend(&side, &keys)?;
    plot.present().map_err(err)?;
    Ok(true)
}

/// Each phase's slack in % of its requirement per interval, with zero and the guard band.
fn slack_svg(path: &Path, m: &Margin) -> std::io::Result<bool> {
    let pct = |s: f64, r: f64| (r > 0.0).then(|| 100.0 * s / r);
    let phases: [Curve; 3] = [
        (
            "low",
            BLUE,
            m.intervals
                .iter()
                .filter_map(|i| Some((i.at_s, pct(i.low_slack_ns, i.low_required_ns)?)))
                .collect(),
        ),
        (
            "high",
            MAGENTA,
            m.intervals
                .iter()
                .filter_map(|i| Some((i.at_s, pct(i.high_slack_ns, i.high_required_ns)?)))
                .collect(),
        ),
        (
            "period",
            GREEN,
            m.intervals
                .iter()
                .filter_map(|i| Some((i.at_s, pct(i.period_slack_ns, i.period_required_ns)?)))
                .collect(),
        ),
    ];
    let guard = m.guard_band * 100.0;
    let all = phases.iter().flat_map(|p| p.2.iter());
    let (Some((t0, t1)), Some((y0, y1))) = (
        padded(all.clone().map(|p| p.0), 1e-3),
        padded(all.map(|p| p.1).chain([0.0, guard]), 1.0),
    ) else {
        return Ok(false);
    };
    let (plot, side) = canvas(path)?;
    let mut chart = ChartBuilder::on(&plot)
        .caption(
            "Slack against the worst-case budget over time",
            ("sans-serif", 22),
        )
        .margin(15)
        .x_label_area_size(45)
        .y_label_area_size(80)
        .build_cartesian_2d(t0..t1, y0..y1)
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc("probe time, s")
        .y_desc("slack, % of the requirement")
        .draw()
        .map_err(err)?;
    // below zero: short of the budget
    chart
        .draw_series(std::iter::once(Rectangle::new(
            [(t0, y0), (t1, 0.0f64.max(y0))],
            RED.mix(0.08).filled(),
        )))
        .map_err(err)?;
    chart
        .draw_series(LineSeries::new(
            vec![(t0, 0.0), (t1, 0.0)],
            BLACK.stroke_width(2),
        ))
        .map_err(err)?;
    chart
        .draw_series(DashedLineSeries::new(
            vec![(t0, guard), (t1, guard)],
            6,
            4,
            BLACK.stroke_width(1),
        ))
        .map_err(err)?;
    let mut keys = Vec::new();
    for (name, colour, pts) in &phases {
        if pts.is_empty() {
            continue;
        }
        chart
            .draw_series(LineSeries::new(pts.iter().copied(), colour.stroke_width(2)))
            .map_err(err)?;
        keys.push((format!("{name} (least per interval)"), Key::Line(*colour)));
    }
    keys.push(("zero: the budget itself".into(), Key::Line(BLACK)));
    keys.push((format!("guard band {guard:.0} %"), Key::Dashed(BLACK)));
    keys.push(("short of the budget".into(), Key::Area(RED)));
    let fail = match &m.failure {
        Some(f) => Some(("failure onset".to_string(), f.onset.at_s)),
        None => first_failure(m).map(|(what, t)| (format!("first failure ({what})"), t)),
    };
    if let Some((what, t)) = fail {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(t, y0), (t, y1)],
                6,
                4,
                RED.stroke_width(2),
            ))
            .map_err(err)?;
        keys.push((format!("{what} {t:.3} s"), Key::Dashed(RED)));
    }
    keys.push((
        format!(
            "each slack ± {:.1} ns (one tick)",
            m.intervals[0].uncertainty_ns
        ),
        Key::Note,
    ));
    legend(&side, &keys)?;
    plot.present().map_err(err)?;
    Ok(true)
}

/// Each rail's minimum per interval, with its limit.
fn rail_minima_svg(path: &Path, series: &Series) -> std::io::Result<bool> {
    let colours = [BLUE, GREEN, MAGENTA, CYAN, BLACK, RED];
    let rails: Vec<RailCurve> = series
        .rails
        .iter()
        .enumerate()
        .map(|(k, name)| {
            (
                name.clone(),
                series.rail_limits_mv.get(k).copied().unwrap_or(f64::NAN) / 1000.0,
                series
                    .points
                    .iter()
                    .filter_map(|p| {
                        Some((p.at_s(), p.rail_min_mv.get(k).copied().flatten()? / 1000.0))
                    })
                    .collect::<Vec<(f64, f64)>>(),
            )
        })
        .filter(|r| !r.2.is_empty())
        .collect();
    let all = rails.iter().flat_map(|r| r.2.iter());
    let (Some((t0, t1)), Some((v0, v1))) = (
        padded(all.clone().map(|p| p.0), 1e-3),
        padded(all.map(|p| p.1).chain(rails.iter().map(|r| r.1)), 0.05),
    ) else {
        return Ok(false);
    };
    let (plot, side) = canvas(path)?;
    let mut chart = ChartBuilder::on(&plot)
        .caption("Rail minima over time", ("sans-serif", 22))
        .margin(15)
        .x_label_area_size(45)
        .y_label_area_size(80)
        .build_cartesian_2d(t0..t1, v0..v1)
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc("probe time, s")
        .y_desc("lowest sample per interval, V")
        .draw()
        .map_err(err)?;
    let mut keys = Vec::new();
    let mut limits: Vec<f64> = Vec::new();
    for (i, (name, limit, pts)) in rails.iter().enumerate() {
        let c = colours[i % colours.len()];
        chart
            .draw_series(LineSeries::new(pts.iter().copied(), c.stroke_width(2)))
            .map_err(err)?;
        keys.push((format!("{name} minimum"), Key::Line(c)));
        if limit.is_finite() && !limits.iter().any(|l| (l - limit).abs() < 1e-9) {
            limits.push(*limit);
        }
    }
    for l in limits {
        chart
            .draw_series(DashedLineSeries::new(
                vec![(t0, l), (t1, l)],
                6,
                4,
                RED.stroke_width(2),
            ))
            .map_err(err)?;
        keys.push((format!("rated minimum {l:.2} V"), Key::Dashed(RED)));
    }
    legend(&side, &keys)?;
    plot.present().map_err(err)?;
    Ok(true)
}

/// Write the plots over time into `dir` (the slack plot with a margin); returns the files
/// written. `onset` is the failure to mark (the margin's, or the first one measured).
pub fn write(
    dir: &Path,
    series: &Series,
    margin: Option<&Margin>,
    onset: Option<&FaultOnset>,
) -> std::io::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir)?;
    let mut out = Vec::new();
    let p = dir.join("frequency_over_time.svg");
    if frequency_svg(&p, series, margin, onset)? {
        out.push(p);
    }
    if let Some(m) = margin.filter(|m| !m.intervals.is_empty()) {
        let p = dir.join("slack_over_time.svg");
        if slack_svg(&p, m)? {
            out.push(p);
        }
    }
    let p = dir.join("rail_minima_over_time.svg");
    if rail_minima_svg(&p, series)? {
        out.push(p);
    }
    Ok(out)
}

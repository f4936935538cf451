//! SVG plots of a recording (plotters, SVG backend: no system fonts needed): period and
//! high/low time histograms, TIE over time, each rail over time with its limit, and f_max
//! against supply (the plots of the series over time are in `over_time`).
//!
//! The plots watch the engine (an observer of its feed): the TIE is drawn from the very records
//! the TIE figures were taken from (glitch edges set aside, no record across a continuity
//! break), the rails from the calibrated samples the rail figures were taken from. Time series
//! are decimated while streaming (min/max per bucket, buckets doubling in width past 2048), so
//! memory stays bounded whatever the recording's length.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use plotters::prelude::*;

use slackmeter_core::measure::{DevHistogram, Event, Observer, clock::detrended};
use slackmeter_core::probe::ChannelKind;

const MAX_BUCKETS: usize = 2048;

/// Min/max per time bucket, with adaptive bucket width.
#[derive(Clone, Debug, Default)]
pub struct Decimator {
    start: Option<u64>,
    width: u64,
    buckets: Vec<Option<(f64, f64)>>,
}

impl Decimator {
    fn new(width_ticks: u64) -> Decimator {
        Decimator {
            start: None,
            width: width_ticks.max(1),
            buckets: Vec::new(),
        }
    }

    fn push(&mut self, tick: u64, v: f64) {
        let start = *self.start.get_or_insert(tick);
        let Some(off) = tick.checked_sub(start) else {
            return;
        };
        let mut i = (off / self.width) as usize;
        while i >= MAX_BUCKETS {
            // merge pairs: the buckets double in width
            let merged: Vec<Option<(f64, f64)>> = self
                .buckets
                .chunks(2)
                .map(|c| {
                    c.iter()
                        .flatten()
                        .fold(None, |acc: Option<(f64, f64)>, &(lo, hi)| {
                            Some(acc.map_or((lo, hi), |(a, b)| (a.min(lo), b.max(hi))))
                        })
                })
                .collect();
            self.buckets = merged;
            self.width *= 2;
            i = (off / self.width) as usize;
        }
        if self.buckets.len() <= i {
            self.buckets.resize(i + 1, None);
        }
        let b = &mut self.buckets[i];
        *b = Some(b.map_or((v, v), |(lo, hi)| (lo.min(v), hi.max(v))));
    }

    /// (time s, min, max) per non-empty bucket.
    pub fn points(&self, tick_ns: f64) -> Vec<(f64, f64, f64)> {
        let start = self.start.unwrap_or(0);
        self.buckets
            .iter()
            .enumerate()
            .filter_map(|(i, b)| {
                b.map(|(lo, hi)| {
                    (
                        ((start + i as u64 * self.width) as f64 + self.width as f64 / 2.0)
                            * tick_ns
                            * 1e-9,
                        lo,
                        hi,
                    )
                })
            })
            .collect()
    }
}

struct RailSeries {
    label: String,
    series: Decimator,
}

/// Watches the engine and keeps what the plots need.
#[derive(Default)]
pub struct PlotCollector {
    tick_ns: f64,
    /// The clock the figures are of (the lowest channel id), and the bucket width (1 ms).
    clock: Option<u8>,
    width_ticks: u64,
    rails: BTreeMap<u8, RailSeries>,
    tie: Decimator,
}

impl PlotCollector {
    /// A new collector.
    pub fn new() -> PlotCollector {
        PlotCollector {
            tie: Decimator::new(1),
            ..PlotCollector::default()
        }
    }
}

impl Observer for PlotCollector {
    fn event(&mut self, ev: &Event<'_>) {
        match *ev {
            Event::Probe { desc, new: true } => {
                self.tick_ns = desc.tick_ns;
                self.width_ticks = (1e6 / desc.tick_ns).max(1.0) as u64;
                self.clock = desc
                    .channels
                    .iter()
                    .filter(|c| c.kind == ChannelKind::Edge)
                    .map(|c| c.id)
                    .min();
                self.rails.clear();
                for c in &desc.channels {
                    if c.kind == ChannelKind::Analog {
                        self.rails.entry(c.id).or_insert_with(|| RailSeries {
                            label: c.label.clone(),
                            series: Decimator::new(self.width_ticks),
                        });
                    }
                }
                self.tie = Decimator::new(self.width_ticks);
            }
            Event::Analog {
                channel, samples, ..
            } => {
                if let Some(r) = self.rails.get_mut(&channel) {
                    for s in samples {
                        r.series.push(s.tick, s.mv / 1000.0);
                    }
                }
            }
            _ => {}
        }
    }

    fn wants_tie_records(&self) -> bool {
        true
    }

    /// TIE within the record: its rising edges against their own least-squares line.
    fn tie_record(&mut self, channel: u8, rises: &[u64]) {
        if Some(channel) == self.clock {
            for (&x, r) in rises.iter().zip(detrended(rises)) {
                self.tie.push(x, r * self.tick_ns);
            }
        }
    }

    /// Only what the figures cover is drawn.
    fn reset(&mut self) {
        self.tie = Decimator::new(self.width_ticks);
        for r in self.rails.values_mut() {
            r.series = Decimator::new(self.width_ticks);
        }
    }
}

fn err(e: impl std::fmt::Display) -> std::io::Error {
    std::io::Error::other(e.to_string())
}

/// A plot may be written where nothing is, or over an SVG (an earlier run's plot); any other
/// file of that name is left as it is (an error names it).
pub(crate) fn may_write(path: &Path) -> std::io::Result<()> {
    use std::io::Read;
    let Ok(mut f) = std::fs::File::open(path) else {
        return Ok(());
    };
    let mut head = [0u8; 5];
    let n = f.read(&mut head)?;
    if path.is_file() && &head[..n] == b"<svg " {
        return Ok(());
    }
    Err(std::io::Error::new(
        std::io::ErrorKind::AlreadyExists,
        format!(
            "{} exists and is not a plot: it is left as it is (choose another --plots folder)",
            path.display()
        ),
    ))
}

#[cfg(test)]
mod may_write_tests {
    #[test]
    fn only_plots_are_written_over() {
        let dir = std::env::temp_dir().join(format!("slackmeter-plots-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("period.svg");
        assert!(super::may_write(&p).is_ok(), "nothing there");
        std::fs::write(&p, "<svg width=\"1\"></svg>").unwrap();
        assert!(super::may_write(&p).is_ok(), "an earlier plot");
        std::fs::write(&p, "my notes").unwrap();
        assert!(super::may_write(&p).is_err(), "someone's file");
        assert!(super::may_write(&dir).is_err(), "a folder");
        let _ = std::fs::remove_dir_all(&dir);
    }
}

fn histogram_svg(path: &Path, title: &str, h: &DevHistogram, tick_ns: f64) -> std::io::Result<()> {
    let b = h.buckets();
    if b.is_empty() {
        return Ok(());
    }
    let lo = b.first().map_or(0.0, |x| x.0 as f64 * tick_ns) - tick_ns;
    let hi = b.last().map_or(1.0, |x| x.0 as f64 * tick_ns) + tick_ns;
    let top = b.iter().map(|x| x.1).max().unwrap_or(1) as f64 * 1.1;
    may_write(path)?;
    let root = SVGBackend::new(path, (900, 500)).into_drawing_area();
    root.fill(&WHITE).map_err(err)?;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 22))
        .margin(15)
        .x_label_area_size(45)
        .y_label_area_size(70)
        .build_cartesian_2d(lo..hi, (0.5f64..top.max(2.0)).log_scale())
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc("ns")
        .y_desc("cycles (log)")
        .draw()
        .map_err(err)?;
    let w = tick_ns * 0.45;
    chart
        .draw_series(b.iter().map(|&(v, c)| {
            let x = v as f64 * tick_ns;
            Rectangle::new([(x - w, 0.5), (x + w, c as f64)], BLUE.mix(0.7).filled())
        }))
        .map_err(err)?;
    root.present().map_err(err)
}

fn series_svg(
    path: &Path,
    title: &str,
    unit: &str,
    pts: &[(f64, f64, f64)],
    limit: Option<f64>,
) -> std::io::Result<()> {
    if pts.is_empty() {
        return Ok(());
    }
    let t0 = pts[0].0;
    let t1 = pts[pts.len() - 1].0.max(t0 + 1e-9);
    let mut lo = pts.iter().map(|p| p.1).fold(f64::INFINITY, f64::min);
    let mut hi = pts.iter().map(|p| p.2).fold(f64::NEG_INFINITY, f64::max);
    if let Some(l) = limit {
        lo = lo.min(l);
        hi = hi.max(l);
    }
    let pad = ((hi - lo) * 0.08).max(1e-9);
    may_write(path)?;
    let root = SVGBackend::new(path, (900, 450)).into_drawing_area();
    root.fill(&WHITE).map_err(err)?;
    let mut chart = ChartBuilder::on(&root)
        .caption(title, ("sans-serif", 22))
        .margin(15)
        .x_label_area_size(45)
        .y_label_area_size(70)
        .build_cartesian_2d(t0..t1, (lo - pad)..(hi + pad))
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc("probe time, s")
        .y_desc(unit)
        .draw()
        .map_err(err)?;
    // min and max per bucket as a band (vertical strokes), drawn in one series
    chart
        .draw_series(
            pts.iter()
                .map(|&(t, a, b)| PathElement::new(vec![(t, a), (t, b)], BLUE.stroke_width(1))),
        )
        .map_err(err)?
        .label("min … max per time bucket")
        .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], BLUE));
    if let Some(l) = limit {
        chart
            .draw_series(LineSeries::new(vec![(t0, l), (t1, l)], RED.stroke_width(2)))
            .map_err(err)?
            .label(format!("limit {l:.2} {unit}"))
            .legend(|(x, y)| PathElement::new(vec![(x, y), (x + 20, y)], RED));
    }
    chart
        .configure_series_labels()
        .background_style(WHITE.mix(0.8))
        .border_style(BLACK)
        .draw()
        .map_err(err)?;
    root.present().map_err(err)
}

/// Write every plot into `dir`; returns the files written.
pub fn write(
    dir: &Path,
    c: &PlotCollector,
    hists: Option<&([DevHistogram; 3], f64)>,
    limits_v: &BTreeMap<String, f64>,
) -> std::io::Result<Vec<PathBuf>> {
    std::fs::create_dir_all(dir)?;
    let mut out = Vec::new();
    if let Some((h, tick)) = hists {
        for (name, title, hist) in [
            ("period_histogram.svg", "Clock period histogram", &h[0]),
            (
                "high_time_histogram.svg",
                "High time histogram (worst cycles at the left)",
                &h[1],
            ),
            (
                "low_time_histogram.svg",
                "Low time histogram (worst cycles at the left)",
                &h[2],
            ),
        ] {
            let p = dir.join(name);
            histogram_svg(&p, title, hist, *tick)?;
            out.push(p);
        }
    }
    let tie = c.tie.points(c.tick_ns);
    if !tie.is_empty() {
        let p = dir.join("tie.svg");
        series_svg(
            &p,
            "Time interval error (within 1024-cycle records)",
            "ns",
            &tie,
            None,
        )?;
        out.push(p);
    }
    for r in c.rails.values() {
        let p = dir.join(format!(
            "rail_{}.svg",
            r.label
                .chars()
                .map(|x| if x.is_ascii_alphanumeric() || x == '_' {
                    x
                } else {
                    '_'
                })
                .collect::<String>()
        ));
        let limit = limits_v.get(&r.label).copied();
        series_svg(
            &p,
            &format!("Rail {} over time", r.label),
            "V",
            &r.series.points(c.tick_ns),
            limit,
        )?;
        out.push(p);
    }
    Ok(out)
}

/// What the supply plot draws besides the budget's curves.
#[derive(Clone, Debug, Default)]
pub struct SupplyMarks {
    /// The measured operating point: supply V, frequency Hz, its uncertainty Hz.
    pub operating: Option<(f64, f64, f64)>,
    /// Measured failure onsets: supply V, frequency Hz, uncertainty Hz.
    pub failures: Vec<(f64, f64, f64)>,
    /// The parts' rated supply range, V (outside it: shaded, no data sheet holds there).
    pub rated_v: Option<(f64, f64)>,
    /// The guard band: the worst-case curve is drawn again at f / (1 + guard).
    pub guard_band: Option<f64>,
}

/// f_max against supply from the budget (worst case and typical, at the measured duty), with the
/// measured operating point and failure onsets with their uncertainty bars, the region outside
/// the parts' rated supply shaded, and the worst-case curve less the guard band. The y axis
/// fits the data; the legend sits beside the plot.
pub fn fmax_vcc_svg(
    path: &Path,
    curves: &[(&str, Vec<(f64, f64)>)],
    marks: &SupplyMarks,
) -> std::io::Result<()> {
    use super::over_time::{Key, legend};
    let all: Vec<(f64, f64)> = curves.iter().flat_map(|c| c.1.iter().copied()).collect();
    if all.is_empty() {
        return Ok(());
    }
    let (vlo, vhi) = all
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), p| {
            (a.min(p.0), b.max(p.0))
        });
    let guard_curve: Option<Vec<(f64, f64)>> = marks.guard_band.and_then(|g| {
        curves
            .first()
            .map(|c| c.1.iter().map(|&(v, f)| (v, f / (1.0 + g))).collect())
    });
    // the y axis: every curve, point and bar, padded
    let ys = all
        .iter()
        .map(|p| p.1)
        .chain(guard_curve.iter().flatten().map(|p| p.1))
        .chain(
            marks
                .operating
                .iter()
                .chain(&marks.failures)
                .flat_map(|&(_, f, u)| [f - u, f + u]),
        )
        .filter(|f| f.is_finite());
    let (flo, fhi) = ys.fold((f64::INFINITY, f64::NEG_INFINITY), |(a, b), f| {
        (a.min(f), b.max(f))
    });
    let pad = ((fhi - flo) * 0.08).max(fhi.abs() * 1e-4).max(1.0);
    let (y0, y1) = ((flo - pad) / 1e6, (fhi + pad) / 1e6);
    may_write(path)?;
    let root = SVGBackend::new(path, (1060, 500)).into_drawing_area();
    root.fill(&WHITE).map_err(err)?;
    let (plot, side) = root.split_horizontally(760);
    let mut chart = ChartBuilder::on(&plot)
        .caption(
            "f_max against supply: budget and measurement",
            ("sans-serif", 22),
        )
        .margin(15)
        .x_label_area_size(45)
        .y_label_area_size(80)
        .build_cartesian_2d(vlo..vhi, y0..y1)
        .map_err(err)?;
    chart
        .configure_mesh()
        .x_desc("supply, V")
        .y_desc("MHz")
        .draw()
        .map_err(err)?;
    let mut keys = Vec::new();
    if let Some((lo, hi)) = marks.rated_v {
        let grey = RGBColor(120, 120, 120);
        for (a, b) in [(vlo, lo.max(vlo)), (hi.min(vhi), vhi)] {
            if b > a {
                chart
                    .draw_series(std::iter::once(Rectangle::new(
                        [(a, y0), (b, y1)],
                        grey.mix(0.2).filled(),
                    )))
                    .map_err(err)?;
            }
        }
        keys.push((
            format!("outside the rated {lo:.2}–{hi:.2} V"),
            Key::Area(grey),
        ));
    }
    let colours = [BLUE, GREEN, MAGENTA];
    for (i, (name, pts)) in curves.iter().enumerate() {
        let c = colours[i % colours.len()];
        chart
            .draw_series(LineSeries::new(
                pts.iter().map(|&(v, f)| (v, f / 1e6)),
                c.stroke_width(2),
            ))
            .map_err(err)?;
        keys.push((name.to_string(), Key::Line(c)));
    }
    if let (Some(g), Some(pts)) = (marks.guard_band, &guard_curve) {
        chart
            .draw_series(DashedLineSeries::new(
                pts.iter().map(|&(v, f)| (v, f / 1e6)),
                6,
                4,
                BLUE.stroke_width(2),
            ))
            .map_err(err)?;
        keys.push((
            format!("worst case less the {:.0} % guard band", g * 100.0),
            Key::Dashed(BLUE),
        ));
    }
    // uncertainty bars with caps, wide enough to see
    let cap = (vhi - vlo) * 0.008;
    let bars = |pts: &[(f64, f64, f64)], c: RGBColor| -> Vec<PathElement<(f64, f64)>> {
        pts.iter()
            .flat_map(|&(v, f, u)| {
                let (a, b) = ((f - u) / 1e6, (f + u) / 1e6);
                [
                    PathElement::new(vec![(v, a), (v, b)], c.stroke_width(2)),
                    PathElement::new(vec![(v - cap, a), (v + cap, a)], c.stroke_width(2)),
                    PathElement::new(vec![(v - cap, b), (v + cap, b)], c.stroke_width(2)),
                ]
            })
            .collect()
    };
    if let Some(op) = marks.operating {
        chart.draw_series(bars(&[op], BLACK)).map_err(err)?;
        chart
            .draw_series(std::iter::once(Circle::new(
                (op.0, op.1 / 1e6),
                6,
                BLACK.filled(),
            )))
            .map_err(err)?;
        keys.push((
            "measured operating point ± uncertainty".into(),
            Key::Dot(BLACK),
        ));
    }
    if !marks.failures.is_empty() {
        chart.draw_series(bars(&marks.failures, RED)).map_err(err)?;
        chart
            .draw_series(
                marks
                    .failures
                    .iter()
                    .map(|&(v, f, _)| TriangleMarker::new((v, f / 1e6), 8, RED.filled())),
            )
            .map_err(err)?;
        keys.push((
            "measured failure onset ± uncertainty".into(),
            Key::Triangle(RED),
        ));
    }
    legend(&side, &keys)?;
    root.present().map_err(err)
}

//! A recording replayed into the measurement engine (report, failures, budget --recording), and
//! the budget's f_max against supply that the supply plots draw.

use std::io::IsTerminal;
use std::path::Path;

use super::error::CliResult;
use crate::budget::{self, Corner, Design, Library, OperatingPoint};
use crate::measure::{EngineConfig, Feed, NoObserver, Observer, Snapshot, Window};
use crate::record::{Recording, ReplayOptions, ReplaySummary};

/// A recording after its replay.
pub struct Analysis<O = NoObserver> {
    /// The file (its header).
    pub recording: Recording,
    /// The engine after the replay, with its observer.
    pub feed: Feed<O>,
    /// The whole session's figures.
    pub snapshot: Snapshot,
    /// What the replay went through (marks, link events, damage).
    pub summary: ReplaySummary,
}

/// Replay `file` through the engine, watched by `observer` (plots; `NoObserver` otherwise); a
/// progress bar shows on long files.
pub fn analyse<O: Observer>(
    file: &Path,
    opts: ReplayOptions,
    observer: O,
) -> CliResult<Analysis<O>> {
    let mut recording = Recording::open(file)?;
    let mut feed = Feed::with_observer(EngineConfig::default(), observer);
    let bar = (std::io::stderr().is_terminal() && recording.len > 32 << 20).then(|| {
        let b = indicatif::ProgressBar::new(recording.len);
        if let Ok(style) = indicatif::ProgressStyle::with_template(
            "{msg} [{bar:40}] {bytes}/{total_bytes} ({eta})",
        ) {
            b.set_style(style);
        }
        b.set_message("replaying");
        b
    });
    let progress = |at| {
        if let Some(b) = &bar {
            b.set_position(at);
        }
    };
    let summary = recording.replay(&mut feed, opts, progress)?;
    if let Some(b) = bar {
        b.finish_and_clear();
    }
    let snapshot = feed.engine.snapshot(Window::Session);
    Ok(Analysis {
        recording,
        feed,
        snapshot,
        summary,
    })
}

/// The budget's f_max against supply (4.0–5.5 V) at one corner and duty, for the supply plot.
fn fmax_curve(
    d: &Design,
    lib: &Library,
    corner: Corner,
    duty: f64,
    temp_c: Option<f64>,
) -> Vec<(f64, f64)> {
    let mut op = OperatingPoint::of(d);
    op.corner = corner;
    if let Some(t) = temp_c {
        op.temp_c = t;
    }
    budget::sweep_vcc(d, lib, &op, 4.0, 5.5, 61)
        .into_iter()
        .map(|pt| {
            (
                pt.vcc_v,
                1e9 / budget::solver::min_period_ns(
                    pt.low_required_ns,
                    pt.high_required_ns,
                    pt.period_required_ns,
                    duty.clamp(0.01, 0.99),
                ),
            )
        })
        .collect()
}

/// The two budget curves a supply plot draws beside the measurements.
pub fn budget_curves(
    d: &Design,
    lib: &Library,
    duty: f64,
    temp_c: Option<f64>,
) -> [(&'static str, Vec<(f64, f64)>); 2] {
    [
        (
            "worst-case budget (max corner)",
            fmax_curve(d, lib, Corner::Max, duty, temp_c),
        ),
        (
            "typical budget",
            fmax_curve(d, lib, Corner::Typ, duty, temp_c),
        ),
    ]
}

/// The supply range every family of the design's parts is rated for, V (None without parts).
pub fn rated_supply(d: &Design, lib: &Library) -> Option<(f64, f64)> {
    d.instances
        .iter()
        .filter_map(|i| lib.parts.get(i.part))
        .filter_map(|p| lib.families.get(p.family))
        .map(|f| (f.vcc_min_v, f.vcc_max_v))
        .reduce(|a, b| (a.0.max(b.0), a.1.min(b.1)))
}

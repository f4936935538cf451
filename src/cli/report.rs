//! `slackmeter report`: a recording's figures with their uncertainty, and the margin against a
//! design.

use std::io::Write;
use std::path::{Path, PathBuf};

use miette::miette;

use super::analysis::{Analysis, analyse, budget_curves};
use super::args;
use super::design::DesignArgs;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::{Design, Library};
use crate::margin::{self, Margin, MarginConfig, Verdict};
use crate::measure::Window;
use crate::record::ReplayOptions;
use crate::report::plots::{self, PlotCollector};

/// Options of `report`.
#[derive(clap::Args, Debug)]
pub struct ReportArgs {
    /// The recording.
    pub file: PathBuf,
    /// Print the JSON document.
    #[arg(long, conflicts_with = "markdown")]
    pub json: bool,
    /// Print Markdown.
    #[arg(long)]
    pub markdown: bool,
    /// Analyse from this many seconds into the recording.
    #[arg(long, value_parser = args::time_from_start)]
    pub from: Option<f64>,
    /// Analyse up to this many seconds into the recording.
    #[arg(long, value_parser = args::pos_time)]
    pub to: Option<f64>,
    /// Also write SVG plots into this folder (histograms, TIE, rails over time).
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// The design the clock is judged against.
    #[command(flatten)]
    pub design: DesignArgs,
    /// Do not judge against any design, even an embedded one.
    #[arg(long, conflicts_with = "design")]
    pub no_design: bool,
    /// Margin required over the worst-case budget, e.g. 20% (common practice, no source).
    #[arg(long, value_parser = args::fraction, default_value = "20%")]
    pub guard_band: f64,
    /// Temperature to derate at (the design's otherwise), e.g. 85, -40 or "85 °C".
    #[arg(long, value_parser = args::temp, allow_hyphen_values = true)]
    pub temp: Option<f64>,
}

/// The SVGs: the collector's, and with a margin the supply plot.
fn write_plots(
    dir: &Path,
    p: &PlotCollector,
    an: &Analysis<Option<PlotCollector>>,
    judged: Option<(&Design, &Margin)>,
    lib: &Library,
    temp_c: Option<f64>,
) -> CliResult<()> {
    let limits = an
        .snapshot
        .rails
        .iter()
        .map(|r| (r.name.clone(), r.limit_mv / 1000.0))
        .collect();
    let hists = an.feed.engine.clock_histograms(Window::Session);
    let mut files = plots::write(dir, p, hists.as_ref(), &limits).map_err(|e| {
        CliError::runtime(miette!("cannot write plots into {}: {e}", dir.display()))
    })?;
    if let Some((d, m)) = judged {
        let failure: Vec<(f64, f64, f64)> = m
            .failure
            .iter()
            .map(|f| {
                (
                    f.onset.rail.as_ref().map_or(m.vcc_used_v, |r| r.1 / 1000.0),
                    f.onset.frequency_hz,
                    f.onset.frequency_uncertainty_hz,
                )
            })
            .collect();
        let path = dir.join("fmax_vs_supply.svg");
        plots::fmax_vcc_svg(
            &path,
            &budget_curves(d, lib, m.duty, temp_c),
            Some((m.vcc_used_v, m.clock_hz)),
            &failure,
        )
        .map_err(CliError::io(path.display()))?;
        files.push(path);
    }
    for f in files {
        eprintln!("wrote {}", f.display());
    }
    Ok(())
}

/// `slackmeter report`.
pub fn run(a: ReportArgs) -> CliResult<Outcome> {
    let lib = a.design.library()?;
    let opts = ReplayOptions {
        from_s: a.from.map(|ns| ns * 1e-9),
        to_s: a.to.map(|ns| ns * 1e-9),
        speed: None,
    };
    let plots = a.plots.as_ref().map(|_| PlotCollector::new());
    let an = analyse(&a.file, opts, plots)?;
    let file = a.file.display().to_string();
    let header = &an.recording.parsed.header;
    let design = if a.no_design {
        None
    } else {
        a.design.or_embedded(header, &a.file, &lib)?
    };
    let margin = design.as_ref().and_then(|d| {
        let cfg = MarginConfig {
            guard_band: a.guard_band,
            temp_c: a.temp,
            vcc_v: None,
        };
        margin::evaluate(&an.snapshot, d, &lib, &cfg)
            .inspect_err(|e| eprintln!("no margin: {e}"))
            .ok()
    });
    if let (Some(dir), Some(p)) = (&a.plots, an.feed.observer()) {
        let judged = design.as_ref().zip(margin.as_ref());
        write_plots(dir, p, &an, judged, &lib, a.temp)?;
    }
    let (snap, sum) = (&an.snapshot, &an.summary);
    let mut out = std::io::stdout().lock();
    let stdout = CliError::io("standard output");
    if a.json {
        let doc = crate::report::recording::doc(&file, header, snap, sum);
        let mut v = serde_json::to_value(&doc)?;
        if let Some(m) = &margin {
            v["margin"] = serde_json::to_value(m)?;
        }
        serde_json::to_writer_pretty(&mut out, &v)?;
        writeln!(out).map_err(stdout)?;
    } else {
        let text = crate::report::recording::render(&file, header, snap, sum, a.markdown);
        let judged = match (&margin, &design) {
            (Some(m), Some(d)) => crate::report::margin::render(m, &d.name),
            _ => String::new(),
        };
        write!(out, "{text}{judged}").map_err(stdout)?;
    }
    if sum.data_bytes == 0 {
        return Err(CliError::input(miette!(
            help = "the file has a valid header but no readable data chunk",
            "{file}: no probe data"
        )));
    }
    Ok(match &margin {
        Some(m) if m.verdict != Verdict::InsideWorstCase => Outcome::MarginBroken,
        _ => Outcome::Done,
    })
}

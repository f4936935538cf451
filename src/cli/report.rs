//! `slackmeter report`: a recording's figures with their uncertainty, and the margin against a
//! design.

use std::io::Write;
use std::path::{Path, PathBuf};

use miette::miette;

use super::analysis::{Analysis, analyse, budget_curves, rated_supply};
use super::args;
use super::design::DesignArgs;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::{Design, Library};
use crate::margin::{self, Margin, MarginConfig};
use crate::measure::Window;
use crate::record::{ReplayOptions, ReplaySummary};
use crate::report;
use crate::report::over_time;
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
    /// Analyse from this time into the recording (host time since it started), e.g. 5s or
    /// 500ms; a plain number is seconds.
    #[arg(long, value_name = "TIME", value_parser = args::seconds_into, allow_hyphen_values = true)]
    pub from: Option<f64>,
    /// Analyse up to this time into the recording (host time since it started), e.g. 12.5s;
    /// a plain number is seconds.
    #[arg(long, value_name = "TIME", value_parser = args::seconds_into, allow_hyphen_values = true)]
    pub to: Option<f64>,
    /// Also write SVG plots into this folder (histograms, TIE, rails, frequency, slack and rail
    /// minima over time; with a design f_max against supply).
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Overwriting (with --plots: a folder that holds files).
    #[command(flatten)]
    pub force: super::output::ForceArgs,
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
    /// Exit with the margin code (3) also when the sign of some slack is within resolution.
    #[arg(long)]
    pub strict: bool,
}

/// The window asked for, checked against the recording: refused when reversed or outside it.
fn check_window(a: &ReportArgs, sum: &ReplaySummary, file: &str) -> CliResult<String> {
    let end = sum.duration_s;
    let refuse =
        |what: String, help: String| Err(CliError::input(miette!(help = help, "{file}: {what}")));
    if let Some(from) = a.from
        && (sum.from_at_s.is_none() || from >= end)
    {
        return refuse(
            format!("--from {from:.3} s is past the end of the recording ({end:.3} s)"),
            format!("give a time before {end:.3} s"),
        );
    }
    if let Some(to) = a.to
        && !sum.stopped_at_to
        && to > end
    {
        return refuse(
            format!("--to {to:.3} s is past the end of the recording ({end:.3} s)"),
            format!("give a time up to {end:.3} s, or leave --to out"),
        );
    }
    if (a.from.is_some() || a.to.is_some()) && sum.data_bytes == 0 {
        return refuse(
            "the window asked for holds no probe data".into(),
            format!("the recording covers 0 … {end:.3} s: widen --from/--to"),
        );
    }
    let from = a.from.unwrap_or(0.0);
    let to = if sum.stopped_at_to {
        a.to.unwrap_or(end)
    } else {
        end
    };
    // a replay that stopped at --to did not read on to the recording's end
    let length = if sum.stopped_at_to {
        format!("the recording, which runs on past {to:.3} s")
    } else {
        format!("the recording's {end:.3} s")
    };
    Ok(format!(
        "{from:.3} s to {to:.3} s of {length} (host time since it started){}",
        if a.from.is_some() || a.to.is_some() {
            ""
        } else {
            ": all of it"
        }
    ))
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
        let marks = plots::SupplyMarks {
            operating: Some((
                m.vcc_used_v,
                m.operating_hz,
                m.operating_uncertainty_hz.unwrap_or(0.0),
            )),
            failures: failure,
            rated_v: rated_supply(d, lib),
            guard_band: Some(m.guard_band),
        };
        plots::fmax_vcc_svg(&path, &budget_curves(d, lib, m.duty, temp_c), &marks)
            .map_err(CliError::io(path.display()))?;
        files.push(path);
    }
    let onset = judged
        .and_then(|(_, m)| m.failure.as_ref().map(|f| &f.onset))
        .or(an.snapshot.fault_onsets.first());
    let more =
        over_time::write(dir, &an.snapshot.series, judged.map(|j| j.1), onset).map_err(|e| {
            CliError::runtime(miette!("cannot write plots into {}: {e}", dir.display()))
        })?;
    files.extend(more);
    for f in files {
        eprintln!("wrote {}", f.display());
    }
    Ok(())
}

/// The measured rail means beside the power budget of a design with supply wiring (at the
/// clock measured, else the design's); None when the design has no [supply] table.
fn predicted_rails(
    d: &Design,
    lib: &Library,
    snap: &crate::measure::Snapshot,
    measured_hz: Option<f64>,
    temp_c: Option<f64>,
) -> CliResult<Option<Vec<crate::power::compare::RailCheck>>> {
    use crate::power::{self, PowerPoint, SupplyData, Wiring};
    let Some(w) = Wiring::of(d)? else {
        return Ok(None);
    };
    let Some(freq_hz) = measured_hz.or(d.clock.freq_hz) else {
        return Ok(None);
    };
    let pt = PowerPoint {
        freq_hz,
        data_activity: power::current::DEFAULT_DATA_ACTIVITY,
        temp_c: temp_c.unwrap_or(d.operating.temp_c),
    };
    let pb = power::solve(d, lib, &SupplyData::builtin(), &w, &pt);
    let measured: Vec<(String, f64)> = snap
        .rails
        .iter()
        .filter_map(|r| r.mean_mv.map(|m| (r.name.clone(), m / 1000.0)))
        .collect();
    Ok(Some(power::compare::compare(d, &w, &pb, &measured)))
}

/// `slackmeter report`.
pub fn run(a: ReportArgs) -> CliResult<Outcome> {
    let lib = a.design.library()?;
    if let (Some(from), Some(to)) = (a.from, a.to)
        && from >= to
    {
        return Err(CliError::input(miette!(
            help = "--from is where the analysis starts, --to where it ends",
            "--from {from:.3} s is not before --to {to:.3} s"
        )));
    }
    let opts = ReplayOptions {
        from_s: a.from,
        to_s: a.to,
        speed: None,
    };
    if let Some(dir) = &a.plots {
        super::output::check_folder(dir, a.force.force)?;
    }
    let plots = a.plots.as_ref().map(|_| PlotCollector::new());
    let an = analyse(&a.file, opts, plots)?;
    let file = a.file.display().to_string();
    let window = check_window(&a, &an.summary, &file)?;
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
    let rail_checks = design
        .as_ref()
        .map(|d| {
            predicted_rails(
                d,
                &lib,
                snap,
                margin.as_ref().map(|m| m.operating_hz),
                a.temp,
            )
        })
        .transpose()?
        .flatten();
    let mut out = std::io::stdout().lock();
    let stdout = CliError::io("standard output");
    let judged = margin.as_ref().zip(design.as_ref());
    if a.json {
        let doc = crate::report::recording::doc(&file, header, snap, sum);
        let mut v = serde_json::to_value(&doc)?;
        v["window"] = serde_json::json!({
            "from_s": a.from.unwrap_or(0.0),
            "to_s": a.to.filter(|_| sum.stopped_at_to).unwrap_or(sum.duration_s),
            // unknown when the replay stopped at --to (the rest was not read)
            "recording_s": (!sum.stopped_at_to).then_some(sum.duration_s),
            "words": window,
        });
        // the class the probe stated in its HELLO, beside how each clock was observed
        v["probe_class"] = serde_json::json!(snap.probe.as_ref().map(|p| p.probe_class));
        if let Some(m) = &margin {
            v["margin"] = serde_json::to_value(m)?;
        }
        if let Some(c) = &rail_checks {
            v["rails_against_power_budget"] = serde_json::to_value(c)?;
        }
        serde_json::to_writer_pretty(&mut out, &v)?;
        writeln!(out).map_err(stdout)?;
    } else if a.markdown {
        let mut text = report::markdown::render(&file, header, snap, sum, &window);
        text.push_str(&report::series::render_markdown(
            &snap.series,
            margin.as_ref(),
        ));
        if let Some((m, d)) = judged {
            text.push_str(&report::margin::render_markdown(m, &d.name));
        }
        write!(out, "{text}").map_err(stdout)?;
    } else {
        let mut text = report::recording::render(&file, header, snap, sum, &window);
        text.push_str(&report::series::render(&snap.series, margin.as_ref()));
        if let Some((m, d)) = judged {
            text.push_str(&report::margin::render(m, &d.name));
        }
        if let Some(c) = &rail_checks {
            text.push_str(&crate::power::compare::render(c));
        }
        drop(out);
        super::output::report_text(&text)?;
    }
    if sum.data_bytes == 0 {
        return Err(CliError::input(miette!(
            help = "the file has a valid header but no readable data chunk",
            "{file}: no probe data"
        )));
    }
    Ok(match &margin {
        Some(m) if m.verdict.breaks_margin(a.strict) => Outcome::MarginBroken,
        _ => Outcome::Done,
    })
}

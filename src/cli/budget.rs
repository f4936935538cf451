//! `slackmeter budget`: what each clock phase needs, f_max, and the slack against a clock.

use std::collections::BTreeMap;
use std::path::PathBuf;

use clap::ValueEnum;
use miette::miette;

use super::analysis::analyse;
use super::args::{self, LibraryArgs};
use super::error::{CliError, CliResult, Outcome};
use crate::budget::design::DEMO_NAME;
use crate::budget::{self, ClockInput, Corner, Design, OperatingPoint};
use crate::measure::Snapshot;
use crate::record::ReplayOptions;
use crate::report;

/// Late corner for the budget.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum CornerArg {
    /// Guaranteed maxima from the data sheets.
    Max,
    /// Typical values (not guaranteed).
    Typ,
}

/// Options of `budget`.
#[derive(clap::Args, Debug)]
pub struct BudgetArgs {
    /// Design file (TOML); the built-in demo design when absent.
    pub design: Option<PathBuf>,
    /// Supply voltage for every part (overrides the design's operating point), e.g. 4.75V.
    #[arg(long, value_parser = args::voltage)]
    pub vcc: Option<f64>,
    /// Supply of one board section, NAME=VOLTAGE (repeatable), e.g. far=4.62V.
    #[arg(long = "section-vcc", value_name = "NAME=V", value_parser = args::section_vcc)]
    pub section_vcc: Vec<(String, f64)>,
    /// Ambient temperature, e.g. 85, -40 or "85 °C".
    #[arg(long, value_parser = args::temp, allow_hyphen_values = true)]
    pub temp: Option<f64>,
    /// Which data-sheet values the late (setup) analysis uses.
    #[arg(long, value_enum)]
    pub corner: Option<CornerArg>,
    /// Also report f_max at this duty (high fraction), e.g. 0.3 or 30%.
    #[arg(long, value_parser = args::duty)]
    pub duty: Option<f64>,
    /// Hold the budget against a clock of this frequency (with --duty, else the design's or 50 %).
    #[arg(long, value_parser = args::pos_freq)]
    pub freq: Option<f64>,
    /// Print f_max against supply voltage over a range, e.g. 4.0V..5.5V.
    #[arg(long = "sweep-vcc", value_name = "FROM..TO", value_parser = args::vcc_range)]
    pub sweep_vcc: Option<(f64, f64)>,
    /// Points in the supply sweep.
    #[arg(long, default_value_t = 16, value_parser = clap::value_parser!(u16).range(2..=10000))]
    pub points: u16,
    /// The part library.
    #[command(flatten)]
    pub library: LibraryArgs,
    /// Print a JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Take the supply (each section's measured rail minimum, else the lowest rail) and the
    /// clock (measured frequency and duty) from a recording.
    #[arg(long, value_name = "FILE")]
    pub recording: Option<PathBuf>,
}

/// The operating point the flags ask for.
fn operating_point(a: &BudgetArgs, design: &Design) -> CliResult<OperatingPoint> {
    let mut op = OperatingPoint::of(design);
    if let Some(v) = a.vcc {
        op.vcc_v = v;
    }
    if let Some(t) = a.temp {
        op.temp_c = t;
    }
    if let Some(c) = a.corner {
        op.corner = match c {
            CornerArg::Max => Corner::Max,
            CornerArg::Typ => Corner::Typ,
        };
    }
    let mut sections = BTreeMap::new();
    for (s, v) in &a.section_vcc {
        if !design.sections.iter().any(|x| &x.name == s) {
            let known: Vec<&str> = design.sections.iter().map(|x| x.name.as_str()).collect();
            return Err(CliError::input(miette!(
                help = format!("sections of this design: {}", known.join(", ")),
                "--section-vcc names section \"{s}\", which the design does not have"
            )));
        }
        sections.insert(s.clone(), *v);
    }
    op.section_vcc_v = sections;
    Ok(op)
}

/// The measured supply (unless --vcc) and clock of a recording's session.
fn from_recording(
    snap: &Snapshot,
    design: &Design,
    keep_vcc: bool,
    op: &mut OperatingPoint,
) -> Option<ClockInput> {
    if !keep_vcc && let Some((_, mv)) = &snap.worst_rail {
        op.vcc_v = mv / 1000.0;
        for s in &design.sections {
            if let Some(r) = s.rail.as_ref().and_then(|l| snap.rail(l))
                && let Some(m) = r.min_mv
            {
                op.section_vcc_v.entry(s.name.clone()).or_insert(m / 1000.0);
            }
        }
    }
    let c = snap.clock()?;
    Some(ClockInput {
        freq_hz: c.frequency_hz?,
        duty: c.duty.unwrap_or(0.5),
    })
}

/// `slackmeter budget`.
pub fn run(a: BudgetArgs) -> CliResult<Outcome> {
    let lib = a.library.load()?;
    let (design, name) = match &a.design {
        Some(p) => (Design::load(p, &lib)?, p.display().to_string()),
        None => (Design::demo(&lib), format!("{DEMO_NAME} (built-in demo)")),
    };
    let mut op = operating_point(&a, &design)?;
    let mut measured_clock = None;
    if let Some(file) = &a.recording {
        let an = analyse(file, ReplayOptions::default(), crate::measure::NoObserver)?;
        measured_clock = from_recording(&an.snapshot, &design, a.vcc.is_some(), &mut op);
    }

    let clock = match (a.freq, measured_clock) {
        (None, Some(m)) => Some(ClockInput {
            duty: a.duty.unwrap_or(m.duty),
            ..m
        }),
        _ => a.freq.or(design.clock.freq_hz).map(|f| ClockInput {
            freq_hz: f,
            duty: a.duty.or(design.clock.duty).unwrap_or(0.5),
        }),
    };
    if let Some((from, to)) = a.sweep_vcc {
        let pts = budget::solver::sweep_vcc_with_clock(
            &design,
            &lib,
            &op,
            from,
            to,
            a.points as usize,
            clock,
        );
        if a.json {
            let doc = serde_json::json!({
                "design": design.name,
                "temp_c": op.temp_c,
                "corner": op.corner,
                "sweep": pts,
            });
            println!("{}", serde_json::to_string_pretty(&doc)?);
        } else {
            print!("{}", report::budget::render_sweep(&design.name, &pts));
        }
        return Ok(Outcome::Done);
    }

    let b = budget::solve(&design, &lib, &op, clock, a.duty);
    if a.json {
        println!("{}", serde_json::to_string_pretty(&b)?);
    } else {
        print!("{}", report::budget::render(&b, &name));
    }
    Ok(match &b.clock {
        Some(c) if !c.meets => Outcome::MarginBroken,
        _ => Outcome::Done,
    })
}

//! `slackmeter budget`: what each clock phase needs, f_max, and the slack against a clock.

use std::collections::BTreeMap;
use std::path::{Path, PathBuf};

use clap::ValueEnum;
use miette::miette;

use super::analysis::analyse;
use super::args::{self, LibraryArgs};
use super::design::embedded_in;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::design::DEMO_NAME;
use crate::budget::{self, ClockInput, Corner, Design, OperatingPoint};
use crate::margin::{self, MarginConfig};
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

/// Where the sections' supplies come from.
#[derive(Clone, Copy, Debug, ValueEnum, PartialEq, Eq)]
pub enum RailsArg {
    /// Each section at the rail the design's supply wiring predicts (`slackmeter power`); without
    /// --freq the clock is solved as a fixed point with its own dynamic current.
    Predicted,
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
    /// Derate each section at its predicted rail (the design's [supply] wiring). With --freq the
    /// rails are those of that clock; without it the clock is solved as a fixed point (its
    /// dynamic current sets the rails, the rails its f_max), starting at the design's clock.
    #[arg(long, value_enum, conflicts_with_all = ["vcc", "section_vcc", "recording", "sweep_vcc"])]
    pub rails: Option<RailsArg>,
    /// With --rails predicted: data-signal activity, 0…1 (0.25 when absent; common practice,
    /// no source).
    #[arg(long, value_parser = args::fraction, requires = "rails")]
    pub activity: Option<f64>,
    /// With --rails predicted: f_max at the rails each clock of a sweep predicts, e.g.
    /// 1MHz..8MHz (the sag grows with the clock).
    #[arg(long = "sweep-freq", value_name = "FROM..TO", value_parser = args::freq_range, requires = "rails")]
    pub sweep_freq: Option<(f64, f64)>,
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
    /// Judge a recording as `report FILE` does: the design embedded in it (unless a design is
    /// given), the budget at the supply the margin was derated at, and the margin itself.
    #[arg(long, value_name = "FILE", conflicts_with_all = ["freq", "section_vcc"])]
    pub recording: Option<PathBuf>,
    /// Margin required over the worst-case budget with --recording, e.g. 20% (common practice,
    /// no source).
    #[arg(long, value_parser = args::fraction, default_value = "20%", requires = "recording")]
    pub guard_band: f64,
    /// With --recording: exit with the margin code (3) also when the sign of some slack is
    /// within resolution.
    #[arg(long, requires = "recording")]
    pub strict: bool,
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

/// Print JSON or text to standard output (text wrapped to the terminal, or 100 columns); a
/// closed pipe ends quietly.
fn emit(text: &str) -> CliResult<()> {
    if text.starts_with(['{', '[']) {
        super::output::text(text)
    } else {
        super::output::report_text(text)
    }
}

/// The design given, else the one embedded in the recording, else the demo; with its name.
fn pick_design(
    a: &BudgetArgs,
    lib: &crate::budget::Library,
    header: Option<(&crate::record::Header, &Path)>,
) -> CliResult<(Design, String)> {
    if let Some(p) = &a.design {
        return Ok((Design::load(p, lib)?, p.display().to_string()));
    }
    if let Some((h, file)) = header
        && let Some(d) = embedded_in(h, file, lib)?
    {
        let name = d.source.name.clone();
        return Ok((d, name));
    }
    Ok((Design::demo(lib), format!("{DEMO_NAME} (built-in demo)")))
}

/// `slackmeter budget --recording`: the margin of the recording, the budget at its supply.
fn judge_recording(a: &BudgetArgs, file: &Path) -> CliResult<Outcome> {
    let lib = a.library.load()?;
    let an = analyse(file, ReplayOptions::default(), crate::measure::NoObserver)?;
    let (design, name) = pick_design(a, &lib, Some((&an.recording.parsed.header, file)))?;
    let cfg = MarginConfig {
        guard_band: a.guard_band,
        temp_c: a.temp,
        vcc_v: a.vcc,
    };
    let m = margin::evaluate(&an.snapshot, &design, &lib, &cfg).map_err(|e| {
        CliError::input(miette!(
            help = "a recording needs complete clock cycles for a margin",
            "{}: no margin: {e}",
            file.display()
        ))
    })?;
    // the budget at the very supply the margin was derated at
    let mut op = operating_point(a, &design)?;
    op.vcc_v = m.vcc_used_v;
    op.section_vcc_v = m.section_vcc_v.clone();
    op.temp_c = m.temp_c;
    if let Some((from, to)) = a.sweep_vcc {
        let pts = budget::sweep_vcc(&design, &lib, &op, from, to, a.points as usize);
        if a.json {
            let doc = serde_json::json!({
                "design": design.name,
                "temp_c": op.temp_c,
                "corner": op.corner,
                "sweep": pts,
                "margin": m,
            });
            emit(&format!("{}\n", serde_json::to_string_pretty(&doc)?))?;
        } else {
            emit(&report::budget::render_sweep(&design.name, &pts))?;
            emit(&report::margin::render(&m, &design.name))?;
        }
    } else {
        let b = budget::solve(&design, &lib, &op, None, a.duty);
        if a.json {
            let mut v = serde_json::to_value(&b)?;
            v["margin"] = serde_json::to_value(&m)?;
            emit(&format!("{}\n", serde_json::to_string_pretty(&v)?))?;
        } else {
            emit(&report::budget::render(&b, &name))?;
            emit(&report::margin::render(&m, &design.name))?;
        }
    }
    Ok(if m.verdict.breaks_margin(a.strict) {
        Outcome::MarginBroken
    } else {
        Outcome::Done
    })
}

/// `slackmeter budget`.
pub fn run(a: BudgetArgs) -> CliResult<Outcome> {
    if let Some(file) = &a.recording {
        return judge_recording(&a, file);
    }
    let lib = a.library.load()?;
    let (design, name) = pick_design(&a, &lib, None)?;
    let op = operating_point(&a, &design)?;
    let clock = a.freq.or(design.clock.freq_hz).map(|f| ClockInput {
        freq_hz: f,
        duty: a.duty.or(design.clock.duty).unwrap_or(0.5),
    });
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
            emit(&format!("{}\n", serde_json::to_string_pretty(&doc)?))?;
        } else {
            emit(&report::budget::render_sweep(&design.name, &pts))?;
        }
        return Ok(Outcome::Done);
    }

    if a.rails == Some(RailsArg::Predicted) {
        // only a clock asked for is held fixed: the design's planned clock starts the fixed point
        let asked = a.freq.map(|f| ClockInput {
            freq_hz: f,
            duty: a.duty.or(design.clock.duty).unwrap_or(0.5),
        });
        return predicted(&a, &design, &lib, &op, asked, &name);
    }
    let b = budget::solve(&design, &lib, &op, clock, a.duty);
    if a.json {
        emit(&format!("{}\n", serde_json::to_string_pretty(&b)?))?;
    } else {
        emit(&report::budget::render(&b, &name))?;
    }
    Ok(match &b.clock {
        Some(c) if !c.meets => Outcome::MarginBroken,
        _ => Outcome::Done,
    })
}

/// `budget --rails predicted`: the budget at the rails the supply wiring predicts.
fn predicted(
    a: &BudgetArgs,
    design: &Design,
    lib: &crate::budget::Library,
    op: &OperatingPoint,
    clock: Option<ClockInput>,
    name: &str,
) -> CliResult<Outcome> {
    use crate::power::{SupplyData, Wiring, timing::Ask};
    let Some(wiring) = Wiring::of(design)? else {
        return Err(CliError::input(miette!(
            help =
                "add [supply] and a [[feed]] per section (docs/DESIGN-FILE.md, \"Supply wiring\")",
            "{name}: --rails predicted needs the design's supply wiring; it has no [supply] table"
        )));
    };
    let data_activity = a
        .activity
        .unwrap_or(crate::power::current::DEFAULT_DATA_ACTIVITY);
    if !(0.0..=1.0).contains(&data_activity) {
        return Err(CliError::input(miette!(
            help = "a data line toggles at most at the clock: give 0…1, e.g. 0.25",
            "--activity {data_activity} is above 1"
        )));
    }
    let data = SupplyData::builtin();
    let ask = Ask {
        design,
        lib,
        data: &data,
        wiring: &wiring,
        data_activity,
    };
    if let Some((from, to)) = a.sweep_freq {
        let pts = ask.sweep(op, from, to, a.points as usize);
        if a.json {
            let doc = serde_json::json!({ "design": design.name, "sweep_freq": pts });
            emit(&format!("{}\n", serde_json::to_string_pretty(&doc)?))?;
        } else {
            let mut s = format!("f_max at predicted rails, {} ({name})\n", design.name);
            let names: Vec<String> = pts
                .first()
                .map(|p| p.rails_v.iter().map(|(n, _)| format!("{n:>8}")).collect())
                .unwrap_or_default();
            s += &format!(
                "{:>10} {:>9} {} {:>12} {:>12}\n",
                "clock",
                "supply",
                names.join(" "),
                "f_max 50 %",
                "estimate"
            );
            for p in &pts {
                let rails: Vec<String> = p
                    .rails_v
                    .iter()
                    .map(|(_, v)| format!("{v:>6.3} V"))
                    .collect();
                s += &format!(
                    "{:>6.3} MHz {:>6.1} mA {} {:>8.3} MHz {:>8.3} MHz\n",
                    p.freq_hz / 1e6,
                    p.total_ma,
                    rails.join(" "),
                    p.fmax_50_hz / 1e6,
                    p.estimate_fmax_50_hz / 1e6
                );
            }
            emit(&s)?;
        }
        return Ok(Outcome::Done);
    }
    let p = ask.budget(op, clock, a.duty);
    if a.json {
        emit(&format!("{}\n", serde_json::to_string_pretty(&p)?))?;
    } else {
        let rails: Vec<String> = p
            .power
            .sections
            .iter()
            .map(|s| format!("{} {:.3} V", s.name, s.rail_v))
            .collect();
        let how = if p.clock_given {
            format!(
                "at the clock asked for; rails settled in {} iterations",
                p.power.iterations
            )
        } else if p.settled {
            format!(
                "at the clock fixed point (its own f_max at the rails it predicts), reached in {} iterations",
                p.clock_iterations
            )
        } else {
            "nothing limits the clock: the design's clock was used".to_string()
        };
        emit(&format!(
            "Predicted rails at {:.3} MHz ({how}): {}\n",
            p.freq_hz / 1e6,
            rails.join(", ")
        ))?;
        emit(&report::budget::render(&p.budget, name))?;
    }
    Ok(match &p.budget.clock {
        Some(c) if !c.meets => Outcome::MarginBroken,
        _ => Outcome::Done,
    })
}

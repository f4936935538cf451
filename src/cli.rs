//! Command-line interface: argument definitions and dispatch. Thin: parsing, calling, printing.

use std::collections::BTreeMap;
use std::path::PathBuf;

use clap::{Parser, Subcommand, ValueEnum};
use miette::{IntoDiagnostic, Result, miette};

use crate::budget::design::DEMO_NAME;
use crate::budget::{self, ClockInput, Corner, Design, Library, OperatingPoint};
use crate::report;
use crate::units;

/// Exit code: everything fine.
pub const EXIT_OK: i32 = 0;
/// Exit code: a runtime failure (I/O, device).
pub const EXIT_RUNTIME: i32 = 1;
/// Exit code: bad command line or bad input file.
pub const EXIT_INPUT: i32 = 2;
/// Exit code: the analysis ran and the clock does not fit the budget (a margin is violated).
pub const EXIT_MARGIN: i32 = 3;

/// Timing budgets for clocked discrete-logic machines, held against bench measurement.
#[derive(Parser, Debug)]
#[command(name = "slackmeter", version, about, long_about = None)]
#[command(
    after_help = "Exit codes: 0 fine, 1 runtime failure, 2 bad command line or input file, \
3 the clock does not fit the budget."
)]
pub struct Cli {
    #[command(subcommand)]
    pub command: Command,
}

/// Late corner for the budget.
#[derive(Clone, Copy, Debug, ValueEnum)]
pub enum CornerArg {
    /// Guaranteed maxima from the data sheets.
    Max,
    /// Typical values (not guaranteed).
    Typ,
}

#[derive(Subcommand, Debug)]
pub enum Command {
    /// Compute the timing budget of a design: what each clock phase needs, f_max, slack.
    #[command(
        after_help = "Without DESIGN the built-in demo machine (designs/larkspur-8.toml) is used.\n\
Quantities take SI units with or without a space: --vcc 4.75V, --freq \"1.8 MHz\", --temp 85, --duty 30%."
    )]
    Budget(BudgetArgs),
    /// List the part library (built-in parts plus a --parts folder).
    Parts(PartsArgs),
    /// Run the virtual probe: the demo machine's clock, rails and lines, spoken in the probe
    /// protocol on a pseudo-terminal, into a file or to standard output.
    #[command(
        after_help = "Examples:\n  slackmeter sim --pty\n  slackmeter sim --scenario sagging --pty --link /tmp/probe\n  \
slackmeter sim --freq 1.5MHz --duty 30% --jitter 2ns --tick 8ns --rail VCC=4.9V,ripple=20mV --out run.bin --duration 5s\n  \
slackmeter sim --scenario sweep --sweep 1MHz..6MHz --over 30s --fault-on-typ --pty"
    )]
    Sim(Box<crate::cli_probe::SimArgs>),
    /// List the serial ports this system has, with their identification.
    Ports,
    /// Connect to a probe (or a virtual one), show what it is and count what it sends.
    Listen(crate::cli_probe::ListenArgs),
    /// Record a probe (or the virtual probe) to a file, headless, with a progress line.
    Record(Box<crate::cli_record::RecordArgs>),
    /// Analyse a recording: every clock, rail and line figure with its uncertainty.
    Report(crate::cli_record::ReportArgs),
    /// Export a recording's signals for a waveform viewer (VCD) or a spreadsheet (CSV).
    Export(crate::cli_record::ExportArgs),
    /// Set the failure onsets of several sweep recordings (one per supply) beside the budget's
    /// f_max against supply: the measured f_fail(VCC) curve.
    Failures(crate::cli_record::FailuresArgs),
    /// The live bench view: watch a probe (or the virtual probe) with figures and slack.
    #[command(
        after_help = "Keys are shown at the bottom of the view; ? shows them all.\nExample: slackmeter watch --sim"
    )]
    Watch(Box<crate::cli_watch::WatchArgs>),
    /// Replay a recording in the live view (p pauses, + - change speed, n jumps to a mark).
    Replay(crate::cli_watch::ReplayArgs),
}

#[derive(clap::Args, Debug)]
pub struct BudgetArgs {
    /// Design file (TOML); the built-in demo design when absent.
    pub design: Option<PathBuf>,
    /// Supply voltage for every part (overrides the design's operating point), e.g. 4.75V.
    #[arg(long, value_parser = parse_vcc)]
    pub vcc: Option<f64>,
    /// Supply of one board section, NAME=VOLTAGE (repeatable), e.g. far=4.62V.
    #[arg(long = "section-vcc", value_name = "NAME=V", value_parser = parse_section_vcc)]
    pub section_vcc: Vec<(String, f64)>,
    /// Ambient temperature, e.g. 85 or "85 °C".
    #[arg(long, value_parser = parse_temp)]
    pub temp: Option<f64>,
    /// Which data-sheet values the late (setup) analysis uses.
    #[arg(long, value_enum)]
    pub corner: Option<CornerArg>,
    /// Also report f_max at this duty (high fraction), e.g. 0.3 or 30%.
    #[arg(long, value_parser = parse_duty)]
    pub duty: Option<f64>,
    /// Hold the budget against a clock of this frequency (with --duty, else the design's or 50 %).
    #[arg(long, value_parser = parse_freq)]
    pub freq: Option<f64>,
    /// Print f_max against supply voltage over a range, e.g. 4.0V..5.5V.
    #[arg(long = "sweep-vcc", value_name = "FROM..TO", value_parser = parse_range)]
    pub sweep_vcc: Option<(f64, f64)>,
    /// Points in the supply sweep.
    #[arg(long, default_value_t = 16, value_parser = clap::value_parser!(u16).range(2..=10000))]
    pub points: u16,
    /// Folder of extra part files (same format as the built-in library); they replace built-ins by type.
    #[arg(long, env = "SLACKMETER_PARTS")]
    pub parts: Option<PathBuf>,
    /// Print a JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
    /// Take the supply (each section's measured rail minimum, else the lowest rail) and the
    /// clock (measured frequency and duty) from a recording.
    #[arg(long, value_name = "FILE")]
    pub recording: Option<PathBuf>,
}

#[derive(clap::Args, Debug)]
pub struct PartsArgs {
    /// Only parts of this family (e.g. 74HC).
    #[arg(long)]
    pub family: Option<String>,
    /// Folder of extra part files.
    #[arg(long, env = "SLACKMETER_PARTS")]
    pub parts: Option<PathBuf>,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

fn parse_vcc(s: &str) -> Result<f64, String> {
    let v = units::parse_voltage_v(s).map_err(|e| e.to_string())?;
    if v > 0.0 {
        Ok(v)
    } else {
        Err("supply voltage must be positive".into())
    }
}
fn parse_temp(s: &str) -> Result<f64, String> {
    units::parse_temp_c(s).map_err(|e| e.to_string())
}
fn parse_duty(s: &str) -> Result<f64, String> {
    units::parse_duty(s).map_err(|e| e.to_string())
}
fn parse_freq(s: &str) -> Result<f64, String> {
    let f = units::parse_freq_hz(s).map_err(|e| e.to_string())?;
    if f > 0.0 {
        Ok(f)
    } else {
        Err("frequency must be positive".into())
    }
}
fn parse_section_vcc(s: &str) -> Result<(String, f64), String> {
    let (name, v) = s
        .split_once('=')
        .ok_or_else(|| format!("\"{s}\" is not NAME=VOLTAGE, e.g. far=4.62V"))?;
    Ok((name.trim().to_string(), parse_vcc(v)?))
}
fn parse_range(s: &str) -> Result<(f64, f64), String> {
    let (a, b) = s
        .split_once("..")
        .ok_or_else(|| format!("\"{s}\" is not a range FROM..TO, e.g. 4.0V..5.5V"))?;
    let (a, b) = (parse_vcc(a)?, parse_vcc(b)?);
    if a < b {
        Ok((a, b))
    } else {
        Err(format!("range start {a} V must be below its end {b} V"))
    }
}

fn library(parts: &Option<PathBuf>) -> Result<Library> {
    match parts {
        Some(dir) => Library::with_user_dir(dir).map_err(miette::Report::new),
        None => Ok(Library::builtin()),
    }
}

/// Run a parsed command; returns the exit code.
pub fn run(cli: Cli) -> std::result::Result<i32, (i32, miette::Report)> {
    let input = |e: miette::Report| (EXIT_INPUT, e);
    match cli.command {
        Command::Budget(a) => budget_cmd(a).map_err(input),
        Command::Parts(a) => parts_cmd(a).map(|_| EXIT_OK).map_err(input),
        Command::Sim(a) => crate::cli_probe::sim_cmd(*a).map_err(input),
        Command::Ports => crate::cli_probe::ports_cmd().map_err(|e| (EXIT_RUNTIME, e)),
        Command::Listen(a) => crate::cli_probe::listen_cmd(a).map_err(|e| (EXIT_RUNTIME, e)),
        Command::Record(a) => crate::cli_record::record_cmd(*a).map_err(input),
        Command::Report(a) => crate::cli_record::report_cmd(a).map_err(input),
        Command::Export(a) => crate::cli_record::export_cmd(a).map_err(input),
        Command::Failures(a) => crate::cli_record::failures_cmd(a).map_err(input),
        Command::Watch(a) => crate::cli_watch::watch_cmd(*a).map_err(|e| (EXIT_RUNTIME, e)),
        Command::Replay(a) => crate::cli_watch::replay_cmd(a).map_err(|e| (EXIT_RUNTIME, e)),
    }
}

fn budget_cmd(a: BudgetArgs) -> Result<i32> {
    let lib = library(&a.parts)?;
    let (design, name) = match &a.design {
        Some(p) => (
            Design::load(p, &lib).map_err(miette::Report::new)?,
            p.display().to_string(),
        ),
        None => (Design::demo(&lib), format!("{DEMO_NAME} (built-in demo)")),
    };
    let mut op = OperatingPoint::of(&design);
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
            return Err(miette!(
                help = format!("sections of this design: {}", known.join(", ")),
                "--section-vcc names section \"{s}\", which the design does not have"
            ));
        }
        sections.insert(s.clone(), *v);
    }
    op.section_vcc_v = sections;

    let mut measured_clock = None;
    if let Some(file) = &a.recording {
        let (_, _, snap, _) = crate::cli_record::analyse(
            file,
            crate::record::ReplayOptions::default(),
            crate::measure::EngineConfig::default(),
            crate::measure::NoObserver,
        )?;
        if a.vcc.is_none()
            && let Some((_, mv)) = &snap.worst_rail
        {
            op.vcc_v = mv / 1000.0;
            for s in &design.sections {
                if let Some(r) = s.rail.as_ref().and_then(|l| snap.rail(l))
                    && let Some(m) = r.min_mv
                {
                    op.section_vcc_v.entry(s.name.clone()).or_insert(m / 1000.0);
                }
            }
        }
        if let Some(c) = snap.clock()
            && let Some(f) = c.frequency_hz
        {
            measured_clock = Some(ClockInput {
                freq_hz: f,
                duty: c.duty.unwrap_or(0.5),
            });
        }
    }

    if let Some((from, to)) = a.sweep_vcc {
        let pts = budget::sweep_vcc(&design, &lib, &op, from, to, a.points as usize);
        if a.json {
            let doc = serde_json::json!({
                "design": design.name,
                "temp_c": op.temp_c,
                "corner": op.corner,
                "sweep": pts,
            });
            println!("{}", serde_json::to_string_pretty(&doc).into_diagnostic()?);
        } else {
            print!("{}", report::budget::render_sweep(&design.name, &pts));
        }
        return Ok(EXIT_OK);
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
    let b = budget::solve(&design, &lib, &op, clock, a.duty);
    if a.json {
        println!("{}", serde_json::to_string_pretty(&b).into_diagnostic()?);
    } else {
        print!("{}", report::budget::render(&b, &name));
    }
    Ok(match &b.clock {
        Some(c) if !c.meets => EXIT_MARGIN,
        _ => EXIT_OK,
    })
}

fn parts_cmd(a: PartsArgs) -> Result<()> {
    let lib = library(&a.parts)?;
    let parts: Vec<_> = lib
        .parts
        .iter()
        .filter(|p| {
            a.family
                .as_ref()
                .is_none_or(|f| lib.families[p.family].name.eq_ignore_ascii_case(f))
        })
        .collect();
    if parts.is_empty() {
        let fams: Vec<&str> = lib.families.iter().map(|f| f.name.as_str()).collect();
        return Err(miette!(
            help = format!("families: {}", fams.join(", ")),
            "no parts in family {:?}",
            a.family.unwrap_or_default()
        ));
    }
    if a.json {
        let doc: Vec<_> = parts
            .iter()
            .map(|p| {
                serde_json::json!({
                    "type": p.type_name,
                    "family": lib.families[p.family].name,
                    "function": p.function,
                    "source": p.source,
                    "status": p.status,
                    "arcs": p.arcs.iter().map(|a| serde_json::json!({
                        "name": a.name, "kind": a.kind, "status": a.status,
                        "typ_status": a.typ.as_ref().map(|_| a.typ_status), "source": a.source,
                    })).collect::<Vec<_>>(),
                })
            })
            .collect();
        println!("{}", serde_json::to_string_pretty(&doc).into_diagnostic()?);
        return Ok(());
    }
    println!(
        "{:<15} {:<7} {:<12} arcs — function — source",
        "type", "family", "status"
    );
    for p in parts {
        let arcs: Vec<String> = p
            .arcs
            .iter()
            .map(|a| match a.kind {
                budget::library::ArcKind::Delay => a.name.clone(),
                k => format!("{}({})", a.name, format!("{k:?}").to_lowercase()),
            })
            .collect();
        let status = match p.status {
            budget::library::Status::Seen => "seen",
            budget::library::Status::FromMemory => "from memory",
        };
        println!(
            "{:<15} {:<7} {:<12} {} — {} — {}",
            p.type_name,
            lib.families[p.family].name,
            status,
            arcs.join(", "),
            p.function,
            p.source
        );
    }
    for n in &lib.notes {
        println!("note: {n}");
    }
    Ok(())
}

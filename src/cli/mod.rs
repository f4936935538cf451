//! The command line: the parser, the dispatch to one file per command, and the exit code of
//! each outcome (chosen in error.rs, the one place). Shared argument groups and value parsers
//! are in args.rs; commands never import each other.

pub mod analysis;
pub mod args;
pub mod budget;
pub mod check;
pub mod design;
pub mod error;
pub mod export;
pub mod failures;
pub mod import;
pub mod listen;
pub mod live;
pub mod model;
pub mod output;
pub mod parts;
pub mod ports;
pub mod power;
pub mod record;
pub mod replay;
pub mod report;
pub mod signal;
pub mod sim;
pub mod watch;

use std::ffi::OsString;

use clap::{Parser, Subcommand};

use self::error::{CliError, CliResult, Outcome, exit_code};

/// Timing budgets for clocked discrete-logic machines, held against bench measurement.
#[derive(Parser, Debug)]
#[command(name = "slackmeter", version, about, long_about = None)]
#[command(
    after_help = "try: slackmeter watch --sim   (the live view on the virtual probe, no hardware needed)\n\n\
Exit codes: 0 fine, 1 runtime failure (I/O, device), 2 bad command line or \
input file, 3 the clock does not fit the budget."
)]
pub struct Cli {
    /// The command.
    #[command(subcommand)]
    pub command: Command,
}

/// The commands.
#[derive(Subcommand, Debug)]
pub enum Command {
    /// Compute the timing budget of a design: what each clock phase needs, f_max, slack.
    #[command(
        after_help = "Without DESIGN the built-in demo machine (designs/larkspur-8.toml) is used.\n\
Quantities take SI units with or without a space: --vcc 4.75V, --freq \"1.8 MHz\", --temp 85, --duty 30%."
    )]
    Budget(self::budget::BudgetArgs),
    /// Check a design file without solving it: inputs nothing drives, outputs nothing reads,
    /// captures no launch reaches, parts outside every section; each finding located.
    #[command(
        after_help = "Without DESIGN the built-in demo machine (designs/larkspur-8.toml) is checked.\n\
Exit 0 when there are no errors (warnings alone keep 0), 2 when there are."
    )]
    Check(self::check::CheckArgs),
    /// List the part library (built-in parts plus a --parts folder).
    Parts(self::parts::PartsArgs),
    /// Budget the supply: each section's current (static, dynamic, LEDs), the drop along its
    /// feed, the predicted rails and the supply's headroom.
    #[command(
        after_help = "Without DESIGN the built-in demo machine (designs/larkspur-8.toml) is used.\n\
Example: slackmeter power --freq 4MHz --activity 0.3 --json"
    )]
    Power(self::power::PowerArgs),
    /// Write a design file (compact syntax) from a KiCad netlist: parts, the clock followed
    /// through inverters and buffers, registers, arcs; TODO lines for what it cannot decide.
    #[command(
        after_help = "Example: slackmeter import machine.net --clock CLK --map parts-map.toml -o machine.toml"
    )]
    Import(self::import::ImportArgs),
    /// Run the virtual probe: the demo machine's clock, rails and lines, spoken in the probe
    /// protocol on a pseudo-terminal, into a file or to standard output.
    #[command(
        after_help = "Examples:\n  slackmeter sim --pty\n  slackmeter sim --scenario sagging --pty --link /tmp/probe\n  \
slackmeter sim --freq 1.5MHz --duty 30% --jitter 2ns --tick 8ns --rail VCC=4.9V,ripple=20mV --out run.bin --duration 5s\n  \
slackmeter sim --scenario sweep --sweep 1MHz..6MHz --over 30s --fault-on-typ --pty\n  \
slackmeter sim --probe-class extremes --freq 8MHz --high-threshold 50ns --low-threshold 50ns --pty"
    )]
    #[command(mut_arg("design", |a| a.help(
        "Design whose typical timing --fault-on-typ fails by (the built-in demo design by default)"
    )))]
    Sim(Box<self::sim::SimArgs>),
    /// List the serial ports this system has, with their identification.
    Ports,
    /// Connect to a probe (or a virtual one), show what it is and count what it sends.
    Listen(self::listen::ListenArgs),
    /// Record a probe (or the virtual probe) to a file, headless, with a progress line.
    #[command(mut_arg("design", |a| a.help(
        "Design stored in the recording and used by --fault-on-typ (with --sim the built-in demo design by default)"
    )))]
    Record(Box<self::record::RecordArgs>),
    /// Analyse a recording: every clock, rail and line figure with its uncertainty.
    #[command(mut_arg("design", |a| a.help(
        "Judge the clock against this design (the design embedded in the recording otherwise)"
    )))]
    Report(Box<self::report::ReportArgs>),
    /// Export a recording's signals for a waveform viewer (VCD) or a spreadsheet (CSV).
    Export(self::export::ExportArgs),
    /// Set the failure onsets of several sweep recordings (one per supply) beside the budget's
    /// f_max against supply: the measured f_fail(VCC) curve.
    #[command(mut_arg("design", |a| a.help(
        "The design whose f_max(VCC) the failures are set beside (the first file's embedded design otherwise)"
    )))]
    Failures(self::failures::FailuresArgs),
    /// The live bench view: watch a probe (or the virtual probe) with figures and slack.
    #[command(
        after_help = "Keys are shown at the bottom of the view; ? shows them all.\nExample: slackmeter watch --sim"
    )]
    #[command(mut_arg("design", |a| a.help(
        "Design the slack is shown against and --fault-on-typ fails by (the built-in demo design by default)"
    )))]
    Watch(Box<self::watch::WatchArgs>),
    /// Replay a recording in the live view (p pauses, + - change speed, n jumps to a mark).
    #[command(mut_arg("design", |a| a.help(
        "Judge against this design (the one embedded in the recording otherwise)"
    )))]
    Replay(self::replay::ReplayArgs),
}

/// Run a parsed command.
pub fn dispatch(command: Command) -> CliResult<Outcome> {
    match command {
        Command::Budget(a) => self::budget::run(a),
        Command::Check(a) => self::check::run(a),
        Command::Parts(a) => self::parts::run(a),
        Command::Power(a) => self::power::run(a),
        Command::Import(a) => self::import::run(a),
        Command::Sim(a) => self::sim::run(*a),
        Command::Ports => self::ports::run(),
        Command::Listen(a) => self::listen::run(a),
        Command::Record(a) => self::record::run(*a),
        Command::Report(a) => self::report::run(*a),
        Command::Export(a) => self::export::run(a),
        Command::Failures(a) => self::failures::run(a),
        Command::Watch(a) => self::watch::run(*a),
        Command::Replay(a) => self::replay::run(a),
    }
}

/// Parse `args` (the program name first), run the command, print any error; the exit code.
pub fn run_with(args: impl IntoIterator<Item = impl Into<OsString> + Clone>) -> i32 {
    let result = match Cli::try_parse_from(args) {
        Ok(cli) => dispatch(cli.command),
        Err(e) => {
            // clap prints its own message; --help and --version are not errors
            let _ = e.print();
            let parsed = match e.use_stderr() {
                true => Err(CliError::input(miette::miette!("{}", e.kind()))),
                false => Ok(Outcome::Done),
            };
            return exit_code(&parsed);
        }
    };
    if let Err(e) = &result
        && e.kind != error::Kind::Closed
    {
        eprintln!("{}", message(e.report.as_ref()));
    }
    exit_code(&result)
}

/// An error as the user reads it: what happened first, then how to fix it; the library's
/// diagnostic codes (`slackmeter::link::…`) are for programs and are not printed.
pub fn message(d: &(dyn miette::Diagnostic + Send + Sync + 'static)) -> String {
    use miette::ReportHandler;
    struct Shown<'a>(&'a dyn miette::Diagnostic, miette::MietteHandler);
    impl std::fmt::Display for Shown<'_> {
        fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
            self.1.debug(&Uncoded(self.0), f)
        }
    }
    // errors wrap at the terminal's width; into a pipe or a log they stay one line per
    // sentence, so a long path does not break a message in the middle
    let wrap = std::io::IsTerminal::is_terminal(&std::io::stderr());
    let handler = miette::MietteHandlerOpts::new().wrap_lines(wrap).build();
    Shown(d, handler)
        .to_string()
        .trim_start_matches('\n')
        .to_string()
}

/// A diagnostic without its code: everything else as it is.
struct Uncoded<'a>(&'a dyn miette::Diagnostic);

impl std::fmt::Debug for Uncoded<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        std::fmt::Debug::fmt(self.0, f)
    }
}

impl std::fmt::Display for Uncoded<'_> {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        std::fmt::Display::fmt(self.0, f)
    }
}

impl std::error::Error for Uncoded<'_> {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        self.0.source()
    }
}

impl miette::Diagnostic for Uncoded<'_> {
    fn severity(&self) -> Option<miette::Severity> {
        self.0.severity()
    }
    fn help<'a>(&'a self) -> Option<Box<dyn std::fmt::Display + 'a>> {
        self.0.help()
    }
    fn url<'a>(&'a self) -> Option<Box<dyn std::fmt::Display + 'a>> {
        self.0.url()
    }
    fn source_code(&self) -> Option<&dyn miette::SourceCode> {
        self.0.source_code()
    }
    fn labels(&self) -> Option<Box<dyn Iterator<Item = miette::LabeledSpan> + '_>> {
        self.0.labels()
    }
    fn related<'a>(&'a self) -> Option<Box<dyn Iterator<Item = &'a dyn miette::Diagnostic> + 'a>> {
        self.0.related()
    }
    fn diagnostic_source(&self) -> Option<&dyn miette::Diagnostic> {
        self.0.diagnostic_source()
    }
}

/// The program: this process's arguments; the exit code.
pub fn run() -> i32 {
    // errors wrap at the terminal's width; into a pipe or a log they stay one line per
    // sentence, so a long path does not break a message in the middle
    let wrap = std::io::IsTerminal::is_terminal(&std::io::stderr());
    let _ = miette::set_hook(Box::new(move |_| {
        Box::new(miette::MietteHandlerOpts::new().wrap_lines(wrap).build())
    }));
    run_with(std::env::args_os())
}

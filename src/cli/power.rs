//! `slackmeter power`: each section's supply current (static, dynamic, LEDs), the drop along
//! each feed, the predicted rails and the supply's headroom, as a table or JSON.

use std::fmt::Write as _;
use std::path::PathBuf;

use miette::miette;

use super::args::{self, LibraryArgs};
use super::error::{CliError, CliResult, Outcome};
use crate::budget::Design;
use crate::budget::design::DEMO_NAME;
use crate::power::{self, PowerBudget, PowerPoint, SupplyData, Wiring};

/// Options of `power`.
#[derive(clap::Args, Debug)]
pub struct PowerArgs {
    /// Design file (TOML) with a [supply] table; the built-in demo design when absent.
    pub design: Option<PathBuf>,
    /// Clock the dynamic current is computed at (the design's planned clock otherwise).
    #[arg(long, value_parser = args::pos_freq)]
    pub freq: Option<f64>,
    /// Data-signal activity: the share of the clock frequency a data line toggles at, 0…1
    /// (0.25 when absent: a change on half of the cycles; common practice, no source). Clock
    /// inputs toggle at the clock.
    #[arg(long, value_parser = args::fraction)]
    pub activity: Option<f64>,
    /// Ambient temperature, e.g. 70 or "70 °C" (the design's otherwise).
    #[arg(long, value_parser = args::temp, allow_hyphen_values = true)]
    pub temp: Option<f64>,
    /// The part library.
    #[command(flatten)]
    pub library: LibraryArgs,
    /// Print a JSON document instead of the table.
    #[arg(long)]
    pub json: bool,
}

/// Print to standard output (a closed pipe is a runtime failure, not a panic).
fn emit(text: &str) -> CliResult<()> {
    use std::io::Write;
    std::io::stdout()
        .lock()
        .write_all(text.as_bytes())
        .map_err(CliError::io("standard output"))
}

/// The table.
fn render(pb: &PowerBudget, name: &str) -> String {
    let mut s = String::new();
    let _ = writeln!(s, "Power budget of {} ({name})", pb.design);
    let _ = writeln!(
        s,
        "Supply {:.3} V; clock {:.3} MHz, data activity {:.2} (clock inputs 1.00); {:.0} °C; {:.0} mΩ per contact",
        pb.supply_v,
        pb.freq_hz / 1e6,
        pb.data_activity,
        pb.temp_c,
        pb.contact_ohm * 1e3
    );
    let _ = writeln!(s);
    let _ = writeln!(
        s,
        "{:<10} {:>5} {:>9} {:>9} {:>9} {:>9} {:>9} {:>10} {:>8} {:>8}  fed from",
        "section", "chips", "static", "dynamic", "LEDs", "other", "own", "through", "drop", "rail"
    );
    for x in &pb.sections {
        let _ = writeln!(
            s,
            "{:<10} {:>5} {:>6.1} mA {:>6.1} mA {:>6.1} mA {:>6.1} mA {:>6.1} mA {:>7.1} mA {:>5.0} mV {:>6.3} V  {}",
            x.name,
            x.chips,
            x.static_ma,
            x.dynamic_ma,
            x.led_ma,
            x.other_ma,
            x.current_ma,
            x.feed_ma,
            x.drop_mv,
            x.rail_v,
            x.fed_from.as_deref().unwrap_or("(no feed)")
        );
    }
    let _ = writeln!(s);
    let _ = match (pb.supply_limit_ma, pb.supply_headroom_ma) {
        (Some(l), Some(h)) => writeln!(
            s,
            "Total {:.1} mA of the supply's {:.0} mA limit: {:.1} mA headroom",
            pb.total_ma, l, h
        ),
        _ => writeln!(s, "Total {:.1} mA (no supply limit given)", pb.total_ma),
    };
    let _ = writeln!(s, "Rails settled in {} iterations.", pb.iterations);
    let _ = writeln!(
        s,
        "Decoupling (common practice, no source): 100 nF ceramic at each chip's supply pins, 10 µF where each feed enters its section."
    );
    for x in &pb.sections {
        let _ = writeln!(s, "  {}: {}", x.name, x.decoupling);
    }
    if !pb.warnings.is_empty() {
        let _ = writeln!(s);
        for w in &pb.warnings {
            let _ = writeln!(s, "warning: {w}");
        }
    }
    s
}

/// `slackmeter power`.
pub fn run(a: PowerArgs) -> CliResult<Outcome> {
    let lib = a.library.load()?;
    let (design, name) = match &a.design {
        Some(p) => (Design::load(p, &lib)?, p.display().to_string()),
        None => (Design::demo(&lib), format!("{DEMO_NAME} (built-in demo)")),
    };
    let Some(wiring) = Wiring::of(&design)? else {
        return Err(CliError::input(miette!(
            help = "add [supply] voltage = \"5.0 V\" and a [[feed]] per section (docs/DESIGN-FILE.md, \"Supply wiring\")",
            "{name}: the design has no [supply] table: nothing to budget"
        )));
    };
    let activity = a.activity.unwrap_or(power::current::DEFAULT_DATA_ACTIVITY);
    if !(0.0..=1.0).contains(&activity) {
        return Err(CliError::input(miette!(
            help = "a data line toggles at most at the clock: give 0…1, e.g. 0.25 or 25%",
            "--activity {activity} is above 1"
        )));
    }
    let Some(freq_hz) = a.freq.or(design.clock.freq_hz) else {
        return Err(CliError::input(miette!(
            help = "give --freq, e.g. --freq 2MHz, or a [clock] freq in the design",
            "{name}: no clock frequency for the dynamic current"
        )));
    };
    let pt = PowerPoint {
        freq_hz,
        data_activity: activity,
        temp_c: a.temp.unwrap_or(design.operating.temp_c),
    };
    let pb = power::solve(&design, &lib, &SupplyData::builtin(), &wiring, &pt);
    if a.json {
        emit(&format!("{}\n", serde_json::to_string_pretty(&pb)?))?;
    } else {
        emit(&render(&pb, &name))?;
    }
    Ok(Outcome::Done)
}

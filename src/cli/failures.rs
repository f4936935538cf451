//! `slackmeter failures`: the measured failure onsets of several sweeps (one per supply) beside
//! the budget's f_max at each supply: the measured f_fail(VCC) curve.

use super::output::outln;
use std::path::PathBuf;

use miette::miette;

use super::analysis::{analyse, budget_curves, rated_supply};
use super::design::DesignArgs;
use super::error::{CliError, CliResult, Outcome};
use crate::budget::{self, Corner, Design, Library, OperatingPoint};
use crate::measure::FaultOnset;
use crate::record::ReplayOptions;
use crate::report::plots;
use crate::units;

/// Options of `failures`.
#[derive(clap::Args, Debug)]
pub struct FailuresArgs {
    /// Sweep recordings (one per supply voltage), each ending in a failure.
    #[arg(required = true)]
    pub files: Vec<PathBuf>,
    /// The design whose f_max(VCC) the failures are set beside.
    #[command(flatten)]
    pub design: DesignArgs,
    /// Also write fmax_vs_supply.svg into this folder.
    #[arg(long, value_name = "DIR")]
    pub plots: Option<PathBuf>,
    /// Print JSON.
    #[arg(long)]
    pub json: bool,
}

/// One sweep's failure beside the budget at its supply.
#[derive(serde::Serialize)]
struct FailureRow {
    file: String,
    vcc_v: f64,
    fail_onset_hz: f64,
    fail_onset_uncertainty_hz: f64,
    duty: f64,
    cause: String,
    fmax_worst_case_hz: f64,
    fmax_typical_hz: f64,
}

/// The budget's f_max at the onset's supply and duty, at one corner.
fn fmax_at(d: &Design, lib: &Library, vcc_v: f64, o: &FaultOnset, corner: Corner) -> f64 {
    let mut op = OperatingPoint::of(d);
    op.vcc_v = vcc_v;
    op.corner = corner;
    let b = budget::solve(d, lib, &op, None, None);
    1e9 / budget::solver::min_period_ns(
        b.low_required_ns,
        b.high_required_ns,
        b.period_required_ns,
        o.duty.clamp(0.01, 0.99),
    )
}

fn print_table(rows: &[FailureRow]) -> CliResult<()> {
    let mut text = format!(
        "{:>9} {:>26} {:>12} {:>12} {:>9}  file\n",
        "supply", "failure onset", "f_max worst", "f_max typ", "vs typ"
    );
    for r in rows {
        text.push_str(&format!(
            "{:>7.3} V {:>26} {:>12} {:>12} {:>+8.1} %  {}\n",
            r.vcc_v,
            crate::report::table::pm(r.fail_onset_hz, r.fail_onset_uncertainty_hz, "Hz"),
            units::hz(r.fmax_worst_case_hz).to_string(),
            units::hz(r.fmax_typical_hz).to_string(),
            100.0 * (r.fail_onset_hz / r.fmax_typical_hz - 1.0),
            r.file
        ));
    }
    super::output::report_text(&text)
}

/// `slackmeter failures`.
pub fn run(a: FailuresArgs) -> CliResult<Outcome> {
    let lib = a.design.library()?;
    let mut design: Option<Design> = None;
    let mut rows = Vec::new();
    for f in &a.files {
        let an = analyse(f, ReplayOptions::default(), crate::measure::NoObserver)?;
        for dmg in &an.summary.damage {
            eprintln!(
                "{}: damaged at byte {}: {} ({} bytes skipped)",
                f.display(),
                dmg.offset,
                dmg.what,
                dmg.skipped
            );
        }
        if design.is_none() {
            design = a.design.or_embedded(&an.recording.parsed.header, f, &lib)?;
        }
        let d = design.as_ref().ok_or_else(|| {
            CliError::input(miette!(
                help = "give --design",
                "{} embeds no design",
                f.display()
            ))
        })?;
        let Some(o) = an.snapshot.fault_onsets.first() else {
            eprintln!(
                "{}: no failure in this recording (no fault line, and the heartbeat did not stop): left out",
                f.display()
            );
            continue;
        };
        let vcc = o.rail.as_ref().map_or(d.operating.vcc_v, |r| r.1 / 1000.0);
        rows.push(FailureRow {
            file: f.display().to_string(),
            vcc_v: vcc,
            fail_onset_hz: o.frequency_hz,
            fail_onset_uncertainty_hz: o.frequency_uncertainty_hz,
            duty: o.duty,
            cause: o.cause.clone(),
            fmax_worst_case_hz: fmax_at(d, &lib, vcc, o, Corner::Max),
            fmax_typical_hz: fmax_at(d, &lib, vcc, o, Corner::Typ),
        });
    }
    if rows.is_empty() {
        return Err(CliError::input(miette!(
            "none of the recordings holds a failure"
        )));
    }
    rows.sort_by(|x, y| x.vcc_v.total_cmp(&y.vcc_v));
    if a.json {
        outln!("{}", serde_json::to_string_pretty(&rows)?);
    } else {
        print_table(&rows)?;
    }
    if let (Some(dir), Some(d)) = (&a.plots, &design) {
        std::fs::create_dir_all(dir)
            .map_err(|e| CliError::runtime(miette!("cannot create {}: {e}", dir.display())))?;
        let duty = rows.iter().map(|r| r.duty).sum::<f64>() / rows.len() as f64;
        let pts: Vec<(f64, f64, f64)> = rows
            .iter()
            .map(|r| (r.vcc_v, r.fail_onset_hz, r.fail_onset_uncertainty_hz))
            .collect();
        let path = dir.join("fmax_vs_supply.svg");
        let marks = plots::SupplyMarks {
            failures: pts,
            rated_v: rated_supply(d, &lib),
            ..plots::SupplyMarks::default()
        };
        plots::fmax_vcc_svg(&path, &budget_curves(d, &lib, duty, None), &marks)
            .map_err(CliError::io(path.display()))?;
        eprintln!("wrote {}", path.display());
    }
    Ok(Outcome::Done)
}

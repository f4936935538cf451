//! The virtual probe from the command line: the bench model its flags describe, the notes it
//! sends, and the failure rule `--fault-on-typ` takes from a design's typical budget.

use miette::miette;

use super::args::SimModelArgs;
use super::error::{CliError, CliResult};
use crate::budget::{self, Corner, Design, Library, OperatingPoint};
use crate::sim::{BenchModel, FaultLimit, Sweep};

/// A virtual probe ready to run.
pub struct SimSetup {
    /// What it simulates.
    pub model: BenchModel,
    /// The LOG lines it sends after HELLO (scenario, design, parameters).
    pub notes: Vec<String>,
    /// Its parameters as a recording's header shows them (the long fault table left out).
    pub shown: serde_json::Value,
}

/// The virtual machine's failure rule: the design's typical budget over 3–6 V at `temp_c`.
pub fn typical_fault_limit(design: &Design, lib: &Library, temp_c: f64) -> FaultLimit {
    let mut op = OperatingPoint::of(design);
    op.corner = Corner::Typ;
    op.temp_c = temp_c;
    let by_vcc = budget::sweep_vcc(design, lib, &op, 3.0, 6.0, 151)
        .into_iter()
        .map(|p| {
            (
                p.vcc_v,
                p.low_required_ns,
                p.high_required_ns,
                p.period_required_ns,
            )
        })
        .collect();
    FaultLimit {
        by_vcc,
        source: format!("typical budget of {} at {temp_c} °C", design.name),
    }
}

fn set<T: Copy>(to: &mut T, from: Option<T>) {
    if let Some(v) = from {
        *to = v;
    }
}

/// The bench model the flags describe; `design` sets the failure rule of `--fault-on-typ`.
pub fn build_model(a: &SimModelArgs, design: &Design, lib: &Library) -> CliResult<SimSetup> {
    let mut m = BenchModel::scenario(&a.scenario).ok_or_else(|| {
        CliError::input(miette!(
            help = format!("scenarios: {}", BenchModel::SCENARIOS.join(", ")),
            "unknown scenario \"{}\"",
            a.scenario
        ))
    })?;
    set(&mut m.freq_hz, a.freq);
    set(&mut m.duty, a.duty);
    set(&mut m.jitter_rms_ns, a.jitter);
    set(&mut m.edge_jitter_rms_ns, a.edge_jitter);
    set(&mut m.drift_ppm, a.drift_ppm);
    set(&mut m.tick_ns, a.tick);
    set(&mut m.glitch_rate_hz, a.glitch_rate);
    set(&mut m.glitch_width_ns, a.glitch_width);
    set(&mut m.stall_rate_hz, a.stall_rate);
    set(&mut m.stall_periods, a.stall_periods);
    set(&mut m.heartbeat_hz, a.heartbeat);
    set(&mut m.seed, a.seed);
    set(&mut m.analog_rate_hz, a.analog_rate);
    if !a.rail.is_empty() {
        m.rails = a.rail.clone();
    }
    if let Some(r) = a.reset_every {
        m.reset_interval_s = Some(r * 1e-9);
    }
    m.probe_class = a.probe_class;
    m.window_s = a.window.map(|ns| ns * 1e-9);
    m.high_threshold_ns = a.high_threshold;
    m.low_threshold_ns = a.low_threshold;
    if let Some((n, every_ns)) = a.bursts {
        m.burst_edges = Some(n);
        m.burst_every_s = every_ns * 1e-9;
    }
    match (a.sweep, a.over) {
        (Some((from, to)), over) => {
            m.sweep = Some(Sweep {
                from_hz: from,
                to_hz: to,
                over_s: over.map_or(30.0, |ns| ns * 1e-9),
            });
            m.freq_hz = from;
        }
        (None, Some(over)) => match &mut m.sweep {
            Some(s) => s.over_s = over * 1e-9,
            None => {
                return Err(CliError::input(miette!(
                    help = "add --sweep FROM..TO",
                    "--over needs --sweep"
                )));
            }
        },
        (None, None) => {}
    }
    let mut notes = vec![format!("sim-scenario {}", a.scenario)];
    if a.fault_on_typ {
        notes.push(format!(
            "sim-design {} ({}, {} bytes, crc32 {:08x})",
            design.name,
            design.source.name,
            design.source.text.len(),
            firmware_protocol::crc32(design.source.text.as_bytes())
        ));
        m.fault = Some(typical_fault_limit(design, lib, a.temp));
    }
    m.validate().map_err(|e| CliError::input(miette!("{e}")))?;
    let mut shown = m.clone();
    if let Some(f) = &mut shown.fault {
        f.by_vcc.clear(); // the table is long; the design note names its source
    }
    notes.push(format!("sim-params {}", serde_json::to_string(&shown)?));
    Ok(SimSetup {
        model: m,
        notes,
        shown: serde_json::to_value(&shown)?,
    })
}

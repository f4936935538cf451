//! Value parsers (quantities, ranges, rails, probe settings) and the argument groups several
//! commands share: a real probe's port options, the virtual probe's model, the choice between
//! the two, the part library. (The design option, with its library, is in design.rs.)

use std::path::PathBuf;

use crate::link::{Setting, SettingChannel};
use firmware_protocol::params;

use miette::miette;

use super::error::{CliError, CliResult};
use crate::budget::Library;
use crate::sim::{RailModel, RippleShape};
use crate::units;

/// Result of a value parser (clap shows the message with the flag).
type Parsed<T> = Result<T, String>;

fn positive(v: f64, what: &str) -> Parsed<f64> {
    if v > 0.0 {
        Ok(v)
    } else {
        Err(format!("{what} must be positive"))
    }
}

/// A supply voltage, e.g. 4.75V (positive).
pub fn voltage(s: &str) -> Parsed<f64> {
    positive(
        units::parse_voltage_v(s).map_err(|e| e.to_string())?,
        "a supply voltage",
    )
}

/// A temperature: 85, 85C or "85 °C".
pub fn temp(s: &str) -> Parsed<f64> {
    units::parse_temp_c(s).map_err(|e| e.to_string())
}

/// A duty cycle: 0.3 or 30%.
pub fn duty(s: &str) -> Parsed<f64> {
    units::parse_duty(s).map_err(|e| e.to_string())
}

/// A frequency or rate, e.g. 5Hz (zero allowed).
pub fn freq(s: &str) -> Parsed<f64> {
    units::parse_freq_hz(s).map_err(|e| e.to_string())
}

/// A clock frequency, e.g. 1.8MHz (positive).
pub fn pos_freq(s: &str) -> Parsed<f64> {
    positive(freq(s)?, "a frequency")
}

/// A time in ns, e.g. 2ns (any sign).
pub fn time(s: &str) -> Parsed<f64> {
    units::parse_time_ns(s).map_err(|e| e.to_string())
}

/// A duration in ns, e.g. 10s (positive).
pub fn pos_time(s: &str) -> Parsed<f64> {
    positive(time(s)?, "a duration")
}

/// A point in time into a recording, in seconds: a time with its unit (2.5s, 500ms, 1min is
/// not a unit) or a plain number of seconds (2.5); not negative.
pub fn seconds_into(s: &str) -> Parsed<f64> {
    let t = match s.trim().parse::<f64>() {
        Ok(plain) => plain,
        Err(_) => time(s)? * 1e-9,
    };
    if !t.is_finite() {
        Err(format!("\"{s}\" is not a time"))
    } else if t < 0.0 {
        Err("a time into the recording must not be negative".into())
    } else {
        Ok(t)
    }
}

/// A fraction given as "0.2" or "20%" (0 allowed).
pub fn fraction(s: &str) -> Parsed<f64> {
    let t = s.trim();
    let v = match t.strip_suffix('%') {
        Some(p) => p.trim().parse::<f64>().map(|x| x / 100.0),
        None => t.parse::<f64>(),
    }
    .map_err(|_| format!("\"{s}\" is not a fraction: write 0.2 or 20%"))?;
    if (0.0..10.0).contains(&v) {
        Ok(v)
    } else {
        Err(format!("\"{s}\" is out of range"))
    }
}

/// `NAME=VALUE`, the value read by `value`.
fn named<T>(s: &str, example: &str, value: impl Fn(&str) -> Parsed<T>) -> Parsed<(String, T)> {
    let (name, v) = s
        .split_once('=')
        .ok_or_else(|| format!("\"{s}\" is not NAME=VALUE, e.g. {example}"))?;
    Ok((name.trim().to_string(), value(v)?))
}

/// `FROM..TO`, both ends read by `value`.
fn range(s: &str, example: &str, value: impl Fn(&str) -> Parsed<f64>) -> Parsed<(f64, f64)> {
    let (a, b) = s
        .split_once("..")
        .ok_or_else(|| format!("\"{s}\" is not a range FROM..TO, e.g. {example}"))?;
    Ok((value(a)?, value(b)?))
}

/// One board section's supply, NAME=VOLTAGE, e.g. far=4.62V.
pub fn section_vcc(s: &str) -> Parsed<(String, f64)> {
    named(s, "far=4.62V", voltage)
}

/// A supply range for a sweep, e.g. 4.0V..5.5V (rising).
pub fn vcc_range(s: &str) -> Parsed<(f64, f64)> {
    let (a, b) = range(s, "4.0V..5.5V", voltage)?;
    if a < b {
        Ok((a, b))
    } else {
        Err(format!("range start {a} V must be below its end {b} V"))
    }
}

/// A frequency sweep, e.g. 1MHz..6MHz.
pub fn freq_range(s: &str) -> Parsed<(f64, f64)> {
    range(s, "1MHz..6MHz", pos_freq)
}

/// Edge bursts, N/T: N consecutive edges every T, e.g. 4000/100ms.
pub fn bursts(s: &str) -> Parsed<(u32, f64)> {
    let (n, t) = s
        .split_once('/')
        .ok_or_else(|| format!("\"{s}\" is not N/T, e.g. 4000/100ms"))?;
    let n: u32 = n
        .trim()
        .parse()
        .map_err(|_| format!("\"{n}\" is not a whole number of edges"))?;
    if n < 4 {
        return Err("a burst needs at least 4 edges".into());
    }
    Ok((n, pos_time(t)?))
}

/// A simulated rail, NAME=V[,key=value...].
pub fn rail(s: &str) -> Parsed<RailModel> {
    let mut parts = s.split(',');
    let head = parts.next().unwrap_or("");
    let (name, v) = named(head, "VCC_FAR=4.85V", |v| {
        units::parse_voltage_v(v).map_err(|e| e.to_string())
    })?;
    let mut r = RailModel::quiet(&name, v * 1000.0);
    let mv = |x: &str| {
        units::parse_voltage_v(x)
            .map(|v| v * 1000.0)
            .map_err(|e| e.to_string())
    };
    for p in parts {
        let (k, val) = p
            .split_once('=')
            .ok_or_else(|| format!("\"{p}\" is not key=value"))?;
        match k.trim() {
            "ripple" => r.ripple_mv = mv(val)?,
            "ripple-freq" => r.ripple_hz = freq(val)?,
            "ripple-shape" => {
                r.ripple_shape = match val.trim() {
                    "sine" => RippleShape::Sine,
                    "sawtooth" => RippleShape::Sawtooth,
                    "triangle" => RippleShape::Triangle,
                    other => {
                        return Err(format!(
                            "unknown ripple shape \"{other}\": use sine, sawtooth or triangle"
                        ));
                    }
                }
            }
            "hum" => r.hum_mv = mv(val)?,
            "hum-freq" => r.hum_hz = freq(val)?,
            "noise" => r.noise_mv = mv(val)?,
            "sag-rate" => r.sag_rate_hz = freq(val)?,
            "sag-depth" => r.sag_depth_mv = mv(val)?,
            "sag-time" => r.sag_ms = time(val)? / 1e6,
            other => {
                return Err(format!(
                    "unknown rail setting \"{other}\": use ripple, ripple-freq, ripple-shape, hum, hum-freq, noise, sag-rate, sag-depth, sag-time"
                ));
            }
        }
    }
    Ok(r)
}

/// Settings a probe takes with CONFIGURE (PROTOCOL.md §5.8), by the names `--set` uses.
const SETTINGS: [(&str, u8); 11] = [
    ("enable", params::ENABLE),
    ("edge-mode", params::EDGE_MODE),
    ("gate", params::GATE_TICKS),
    ("sample-interval", params::SAMPLE_INTERVAL_TICKS),
    ("duty-samples", params::DUTY_SAMPLES),
    ("cal-scale", params::CAL_SCALE_NUM_UV),
    ("cal-offset", params::CAL_OFFSET_UV),
    ("status-interval", params::STATUS_INTERVAL_MS),
    ("high-threshold", params::HIGH_THRESHOLD_TICKS),
    ("low-threshold", params::LOW_THRESHOLD_TICKS),
    ("window", params::WINDOW_TICKS),
];

/// `CHANNEL:NAME=VALUE` (channel a number, a label from the probe's HELLO such as `CLK`, or
/// `probe`) into a setting the link sends as a CONFIGURE.
pub fn probe_setting(s: &str) -> Parsed<Setting> {
    let form = "write CHANNEL:NAME=VALUE, e.g. CLK:edge-mode=timestamps, 0:edge-mode=count or 8:cal-scale=6622417";
    let (ch, rest) = s
        .split_once(':')
        .ok_or(format!("no ':' in {s:?}: {form}"))?;
    let (name, value) = rest
        .split_once('=')
        .ok_or(format!("no '=' in {s:?}: {form}"))?;
    let channel = match ch.trim() {
        "probe" => SettingChannel::Id(params::PROBE),
        "" => return Err(format!("no channel before ':' in {s:?}: {form}")),
        c if c.starts_with(|x: char| x.is_ascii_digit()) => SettingChannel::Id(
            c.parse::<u8>()
                .ok()
                .filter(|&id| id != params::PROBE)
                .ok_or(format!(
                    "channel {c:?} is not a channel id (0…254), a channel label or `probe`: {form}"
                ))?,
        ),
        label => SettingChannel::Label(label.to_string()),
    };
    let names = SETTINGS.map(|(n, _)| n).join(", ");
    let param = SETTINGS
        .iter()
        .find(|(n, _)| *n == name.trim())
        .map(|(_, p)| *p)
        .ok_or(format!(
            "unknown setting {name:?}; the settings are: {names}"
        ))?;
    let v = value.trim();
    let value = match (name.trim(), v) {
        ("edge-mode", "timestamps") => 0,
        ("edge-mode", "count") => 1,
        ("edge-mode", "both") => 2,
        ("edge-mode", "extremes") => 3,
        ("enable", "on") => 1,
        ("enable", "off") => 0,
        ("cal-offset", _) => v
            .parse::<i32>()
            .map(|x| x as u32)
            .map_err(|_| format!("{v:?} is not a whole number of µV for cal-offset"))?,
        (n, _) => v.parse::<u32>().map_err(|_| {
            let hint = match n {
                "edge-mode" => " (timestamps, count, both or extremes)",
                "enable" => " (on or off)",
                "gate" | "sample-interval" | "high-threshold" | "low-threshold" | "window" => {
                    " (in the probe's ticks)"
                }
                "status-interval" => " (in ms)",
                _ => "",
            };
            format!("{v:?} is not a value for {n}{hint}")
        })?,
    };
    Ok(Setting {
        channel,
        param,
        value,
        words: format!("{}={v}", name.trim()),
    })
}

/// A real probe's port options (listen, record, watch).
#[derive(clap::Args, Debug, Clone)]
pub struct PortArgs {
    /// Baud rate of the port (pseudo-terminals and USB-CDC ignore it).
    #[arg(long, default_value_t = 1_000_000)]
    pub baud: u32,
    /// A probe setting sent before streaming starts, CHANNEL:NAME=VALUE (repeatable; CHANNEL an
    /// id, a label such as CLK, or `probe` for all): enable, edge-mode (timestamps, count,
    /// both, extremes), gate and sample-interval (probe ticks), duty-samples, cal-scale,
    /// cal-offset (µV), status-interval (ms), high-threshold, low-threshold and window (probe
    /// ticks; an extremes probe).
    #[arg(long = "set", value_name = "CH:NAME=VALUE", value_parser = probe_setting)]
    pub settings: Vec<Setting>,
}

impl PortArgs {
    /// The link to the probe on `port` with these options.
    pub fn link_config(&self, port: impl Into<PathBuf>) -> crate::link::LinkConfig {
        let mut cfg = crate::link::LinkConfig::new(port);
        cfg.baud = self.baud;
        cfg.configure = self.settings.clone();
        cfg
    }
}

/// Where the data comes from: a probe on a port, or the virtual probe (record, watch).
#[derive(clap::Args, Debug, Clone)]
pub struct ProbeArgs {
    /// Serial device of the probe (omit with --sim).
    pub port: Option<PathBuf>,
    /// The virtual probe instead (its flags as for `slackmeter sim`).
    #[arg(long, conflicts_with = "settings")]
    pub sim: bool,
    /// The virtual probe's settings (with --sim).
    #[command(flatten, next_help_heading = "Virtual probe (only with --sim)")]
    pub model: SimModelArgs,
    /// A real probe's port options.
    #[command(flatten, next_help_heading = "Probe on a port (only with PORT)")]
    pub port_options: PortArgs,
}

impl ProbeArgs {
    /// Exactly one of PORT and --sim; `example` shows both ways.
    pub fn check(&self, example: &str) -> CliResult<()> {
        if self.sim == self.port.is_some() {
            return Err(CliError::input(miette!(
                help = format!("e.g. {example}"),
                "give either a PORT or --sim"
            )));
        }
        Ok(())
    }
}

/// The part library: the built-in parts plus a folder of the user's (budget, parts, and every
/// command that loads a design).
#[derive(clap::Args, Debug, Clone)]
pub struct LibraryArgs {
    /// Folder of extra part files (same format as the built-in library); they replace built-ins
    /// by type.
    #[arg(long, env = "SLACKMETER_PARTS", value_name = "DIR")]
    pub parts: Option<PathBuf>,
}

impl LibraryArgs {
    /// The library these options name.
    pub fn load(&self) -> CliResult<Library> {
        Ok(match &self.parts {
            Some(dir) => Library::with_user_dir(dir)?,
            None => Library::builtin(),
        })
    }
}

/// What the virtual probe simulates (sim, record --sim, watch --sim).
#[derive(clap::Args, Debug, Clone)]
pub struct SimModelArgs {
    /// Built-in scenario of the demo machine: steady, sagging, sweep (flags below override it).
    #[arg(long, default_value = "steady")]
    pub scenario: String,
    /// Clock frequency, e.g. 1.5MHz.
    #[arg(long, value_parser = pos_freq)]
    pub freq: Option<f64>,
    /// Duty cycle (high fraction): 0.3 or 30%.
    #[arg(long, value_parser = duty)]
    pub duty: Option<f64>,
    /// RMS period jitter (successive periods independent), e.g. 2ns.
    #[arg(long, value_parser = time)]
    pub jitter: Option<f64>,
    /// RMS white phase noise of each edge (a crystal's jitter, not accumulating), e.g. 50ps.
    #[arg(long, value_parser = time)]
    pub edge_jitter: Option<f64>,
    /// Slow sinusoidal frequency drift amplitude in ppm (period 60 s).
    #[arg(long)]
    pub drift_ppm: Option<f64>,
    /// Probe tick, e.g. 8ns or 62.5ns.
    #[arg(long, value_parser = pos_time)]
    pub tick: Option<f64>,
    /// Mean rate of glitches (short extra pulses), e.g. 5Hz.
    #[arg(long, value_parser = freq)]
    pub glitch_rate: Option<f64>,
    /// Width of a glitch, e.g. 10ns.
    #[arg(long, value_parser = pos_time)]
    pub glitch_width: Option<f64>,
    /// Mean rate of stalls (the clock stops for --stall-periods periods), e.g. 0.5Hz.
    #[arg(long, value_parser = freq)]
    pub stall_rate: Option<f64>,
    /// Length of a stall in clock periods.
    #[arg(long)]
    pub stall_periods: Option<f64>,
    /// A rail: NAME=VOLTAGE[,ripple=20mV][,ripple-freq=100Hz][,ripple-shape=sawtooth][,hum=5mV][,hum-freq=100Hz][,noise=5mV][,sag-rate=2Hz][,sag-depth=300mV][,sag-time=20ms]
    /// (repeatable; replaces the scenario's rails).
    #[arg(long, value_name = "NAME=V[,...]", value_parser = rail)]
    pub rail: Vec<RailModel>,
    /// Heartbeat rate of the machine's self-test loop, e.g. 2Hz.
    #[arg(long, value_parser = freq)]
    pub heartbeat: Option<f64>,
    /// A reset pulse every this long, e.g. 10s (clears a fault).
    #[arg(long, value_parser = pos_time)]
    pub reset_every: Option<f64>,
    /// Sweep the clock frequency, e.g. 1MHz..6MHz (with --over).
    #[arg(long, value_name = "FROM..TO", value_parser = freq_range)]
    pub sweep: Option<(f64, f64)>,
    /// Duration of the sweep ramp, e.g. 30s.
    #[arg(long, value_parser = pos_time)]
    pub over: Option<f64>,
    /// Raise the fault line (and stop the heartbeat) when the clock breaks the design's typical
    /// timing (--design, the demo design by default) at the lowest simulated rail.
    #[arg(long)]
    pub fault_on_typ: bool,
    /// Temperature for --fault-on-typ.
    #[arg(long, value_parser = temp, default_value = "25", allow_hyphen_values = true)]
    pub temp: f64,
    /// Seed of every random stream.
    #[arg(long)]
    pub seed: Option<u64>,
    /// Stamp edges in bursts: N consecutive edges every T, e.g. 4000/100ms (as a small probe
    /// does; the gaps are flagged as sampling, not loss).
    #[arg(long, value_name = "N/T", value_parser = bursts)]
    pub bursts: Option<(u32, f64)>,
    /// Analog sample rate per rail, e.g. 1kHz (default 10 kHz).
    #[arg(long, value_parser = pos_freq)]
    pub analog_rate: Option<f64>,
    /// How the virtual probe observes the clock: stamping (every edge stamped), counting
    /// (count windows and level samples, as the ATmega328P reference at MHz rates) or extremes
    /// (every cycle timed, each window's extremes and threshold counts sent).
    #[arg(long, value_name = "CLASS", default_value = "stamping", value_parser = probe_class)]
    pub probe_class: crate::sim::ProbeClass,
    /// Window of a counting or extremes probe, e.g. 10ms (default 100 ms counting, 10 ms
    /// extremes).
    #[arg(long, value_parser = pos_time)]
    pub window: Option<f64>,
    /// Extremes probe: count the high times shorter than this, e.g. 120ns.
    #[arg(long, value_parser = pos_time)]
    pub high_threshold: Option<f64>,
    /// Extremes probe: count the low times shorter than this, e.g. 120ns.
    #[arg(long, value_parser = pos_time)]
    pub low_threshold: Option<f64>,
}

/// A probe class by name.
pub fn probe_class(s: &str) -> Parsed<crate::sim::ProbeClass> {
    crate::sim::ProbeClass::parse(s).ok_or_else(|| {
        format!(
            "\"{s}\" is not a probe class: the classes are {}",
            crate::sim::ProbeClass::NAMES.join(", ")
        )
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn settings_parse_by_name_and_value() {
        let c = probe_setting("0:edge-mode=timestamps").unwrap();
        assert_eq!(
            (c.channel, c.param, c.value),
            (SettingChannel::Id(0), params::EDGE_MODE, 0)
        );
        assert_eq!(c.words, "edge-mode=timestamps");
        let c = probe_setting("probe:gate=800000").unwrap();
        assert_eq!(
            (c.channel, c.param, c.value),
            (
                SettingChannel::Id(params::PROBE),
                params::GATE_TICKS,
                800_000
            )
        );
        // a label from the probe's self-description, resolved when the probe answers
        let c = probe_setting("CLK:edge-mode=count").unwrap();
        assert_eq!(
            (c.channel, c.param, c.value),
            (SettingChannel::Label("CLK".into()), params::EDGE_MODE, 1)
        );
        let c = probe_setting("9:cal-offset=-1500").unwrap();
        assert_eq!((c.param, c.value as i32), (params::CAL_OFFSET_UV, -1500));
        let c = probe_setting("CLK:low-threshold=15").unwrap();
        assert_eq!((c.param, c.value), (params::LOW_THRESHOLD_TICKS, 15));
        let c = probe_setting("0:edge-mode=extremes").unwrap();
        assert_eq!((c.param, c.value), (params::EDGE_MODE, 3));
        let c = probe_setting("2:enable=off").unwrap();
        assert_eq!((c.param, c.value), (params::ENABLE, 0));
    }

    #[test]
    fn bad_settings_say_what_and_how() {
        for (s, want) in [
            ("0edge-mode=1", "no ':'"),
            ("0:edge-mode", "no '='"),
            ("9x:gate=1", "not a channel id"),
            ("255:gate=1", "not a channel id"),
            (":gate=1", "no channel"),
            ("0:speed=1", "the settings are: enable, edge-mode"),
            ("0:gate=1ms", "in the probe's ticks"),
            ("0:edge-mode=fast", "timestamps, count, both or extremes"),
            ("CLK:high-threshold=90ns", "in the probe's ticks"),
            ("8:cal-offset=1.5", "whole number of µV"),
        ] {
            let e = probe_setting(s).unwrap_err();
            assert!(e.contains(want), "{s}: {e}");
        }
    }

    #[test]
    fn ranges_names_and_signs() {
        assert_eq!(vcc_range("4.0V..5.5V"), Ok((4.0, 5.5)));
        assert!(vcc_range("5.5V..4V").unwrap_err().contains("below its end"));
        assert!(vcc_range("4V-5V").unwrap_err().contains("e.g. 4.0V..5.5V"));
        assert_eq!(freq_range("6MHz..1MHz"), Ok((6e6, 1e6)), "a sweep may fall");
        assert_eq!(section_vcc(" far =4.62V"), Ok(("far".into(), 4.62)));
        assert!(section_vcc("far").unwrap_err().contains("NAME=VALUE"));
        assert!(pos_freq("0Hz").unwrap_err().contains("must be positive"));
        assert!(seconds_into("-1s").is_err());
        assert!(seconds_into("-1").is_err());
        assert_eq!(seconds_into("0s"), Ok(0.0));
        assert_eq!(seconds_into("2.5"), Ok(2.5), "a plain number is seconds");
        assert_eq!(seconds_into("500ms"), Ok(0.5));
        assert!(seconds_into("5 parsecs").is_err());
        assert!(seconds_into("inf").is_err());
        assert_eq!(bursts("4000/100ms"), Ok((4000, 100e6)));
        assert_eq!(fraction("20%"), Ok(0.2));
        let r = rail("VCC=4.9V,ripple=20mV,sag-time=20ms").unwrap();
        assert_eq!((r.name.as_str(), r.nominal_mv), ("VCC", 4900.0));
        assert!((r.ripple_mv - 20.0).abs() < 1e-9 && (r.sag_ms - 20.0).abs() < 1e-9);
        let r = rail(
            "VCC=5V,ripple=30mV,ripple-freq=1kHz,ripple-shape=sawtooth,hum=8mV,hum-freq=100Hz",
        )
        .unwrap();
        assert_eq!(r.ripple_shape, RippleShape::Sawtooth);
        assert!((r.hum_mv - 8.0).abs() < 1e-9 && (r.hum_hz - 100.0).abs() < 1e-9);
        assert!(
            rail("VCC=5V,ripple-shape=square")
                .unwrap_err()
                .contains("use sine, sawtooth or triangle")
        );
        assert!(
            rail("VCC=5V,wobble=1")
                .unwrap_err()
                .contains("unknown rail setting")
        );
    }
}

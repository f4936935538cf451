//! The bench model's parameters: the clock, supply rails and logic lines the virtual probe
//! simulates, its built-in scenarios and their checks. The simulation itself is in `bench`.

use serde::Serialize;

// Time advances in slices (1 ms in the virtual probe); the sweep and the drift change the
// nominal period once per slice, which keeps a sweep's steps far below its jitter.

/// One simulated supply rail.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct RailModel {
    /// Label (matches a design section's `rail`, e.g. "VCC_FAR").
    pub name: String,
    /// Nominal voltage.
    pub nominal_mv: f64,
    /// Ripple, peak to peak.
    pub ripple_mv: f64,
    /// Ripple frequency.
    pub ripple_hz: f64,
    /// Ripple waveform.
    pub ripple_shape: RippleShape,
    /// A second periodic part (a sine, e.g. mains hum beside a regulator's ripple), peak to peak.
    pub hum_mv: f64,
    /// Its frequency.
    pub hum_hz: f64,
    /// Gaussian noise, RMS.
    pub noise_mv: f64,
    /// Mean rate of load-driven sag events.
    pub sag_rate_hz: f64,
    /// Depth of a sag.
    pub sag_depth_mv: f64,
    /// Duration of a sag.
    pub sag_ms: f64,
}

/// The waveform of a rail's ripple, each with its pk-pk as given and zero mean.
#[derive(Clone, Copy, Debug, Serialize, PartialEq, Eq)]
#[serde(rename_all = "lowercase")]
pub enum RippleShape {
    /// A sine.
    Sine,
    /// A rising ramp and a drop at the end of each period (a capacitor charged, then reset).
    Sawtooth,
    /// Equal rising and falling ramps.
    Triangle,
}

impl RippleShape {
    /// The waveform at `phase` (cycles, any real), between −1 and 1, zero mean over a period.
    pub fn at(self, phase: f64) -> f64 {
        let x = phase - phase.floor();
        match self {
            RippleShape::Sine => (2.0 * std::f64::consts::PI * x).sin(),
            RippleShape::Sawtooth => 2.0 * x - 1.0,
            RippleShape::Triangle => 1.0 - 4.0 * (x - 0.5).abs(),
        }
    }
}

impl RailModel {
    /// A quiet rail at `nominal_mv`.
    pub fn quiet(name: &str, nominal_mv: f64) -> RailModel {
        RailModel {
            name: name.to_string(),
            nominal_mv,
            ripple_mv: 0.0,
            ripple_hz: 100.0,
            ripple_shape: RippleShape::Sine,
            hum_mv: 0.0,
            hum_hz: 100.0,
            noise_mv: 0.0,
            sag_rate_hz: 0.0,
            sag_depth_mv: 0.0,
            sag_ms: 0.0,
        }
    }
}

/// A frequency sweep: linear from `from_hz` to `to_hz` over `over_s`, then held.
#[derive(Clone, Copy, Debug, Serialize, PartialEq)]
pub struct Sweep {
    /// Start frequency.
    pub from_hz: f64,
    /// End frequency.
    pub to_hz: f64,
    /// Duration of the ramp.
    pub over_s: f64,
}

/// The timing limit the machine fails beyond: phase requirements as a function of supply.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct FaultLimit {
    /// Rows (supply V, low-phase ns, high-phase ns, period ns), ascending in supply.
    pub by_vcc: Vec<(f64, f64, f64, f64)>,
    /// Where the rows come from (e.g. "typical budget of Larkspur-8").
    pub source: String,
}

impl FaultLimit {
    /// (L, H, P) at a supply, linearly interpolated, clamped at the ends.
    pub fn at(&self, vcc_v: f64) -> (f64, f64, f64) {
        let r = &self.by_vcc;
        if r.is_empty() {
            return (0.0, 0.0, 0.0);
        }
        let i = r.partition_point(|row| row.0 <= vcc_v);
        if i == 0 {
            return (r[0].1, r[0].2, r[0].3);
        }
        if i >= r.len() {
            let l = r[r.len() - 1];
            return (l.1, l.2, l.3);
        }
        let (a, b) = (r[i - 1], r[i]);
        let t = (vcc_v - a.0) / (b.0 - a.0);
        (
            a.1 + t * (b.1 - a.1),
            a.2 + t * (b.2 - a.2),
            a.3 + t * (b.3 - a.3),
        )
    }
}

/// Everything the virtual probe simulates.
#[derive(Clone, Debug, Serialize, PartialEq)]
pub struct BenchModel {
    /// Clock frequency (the sweep's start when sweeping).
    pub freq_hz: f64,
    /// High-time fraction.
    pub duty: f64,
    /// RMS period jitter (successive periods independent: an RC oscillator).
    pub jitter_rms_ns: f64,
    /// RMS white phase noise of every edge about its place on the ideal clock (a crystal's
    /// jitter: it does not accumulate; the period then carries √2 times it).
    #[serde(default)]
    pub edge_jitter_rms_ns: f64,
    /// Slow drift amplitude of the frequency, ppm.
    pub drift_ppm: f64,
    /// Period of the slow drift.
    pub drift_period_s: f64,
    /// Probe tick.
    pub tick_ns: f64,
    /// Mean rate of glitches (short extra pulses).
    pub glitch_rate_hz: f64,
    /// Width of a glitch.
    pub glitch_width_ns: f64,
    /// Mean rate of stalls.
    pub stall_rate_hz: f64,
    /// Length of a stall in clock periods.
    pub stall_periods: f64,
    /// Rails.
    pub rails: Vec<RailModel>,
    /// Analog sample rate per rail.
    pub analog_rate_hz: f64,
    /// Heartbeat toggle rate of the self-test loop (one full cycle per 1/heartbeat_hz).
    pub heartbeat_hz: f64,
    /// A reset pulse every this many seconds (clears a fault).
    pub reset_interval_s: Option<f64>,
    /// Frequency sweep.
    pub sweep: Option<Sweep>,
    /// The limit beyond which the machine faults (fault line up, heartbeat stops).
    pub fault: Option<FaultLimit>,
    /// Seed of every random stream.
    pub seed: u64,
    /// Stamp only bursts: this many consecutive edges every `burst_every_s` (None: every edge).
    #[serde(default)]
    pub burst_edges: Option<u32>,
    /// Spacing of the bursts.
    #[serde(default)]
    pub burst_every_s: f64,
    /// How the virtual probe observes the clock (PROTOCOL.md probe classes).
    #[serde(default)]
    pub probe_class: ProbeClass,
    /// Window of a counting or extremes probe, s (None: its default).
    #[serde(default)]
    pub window_s: Option<f64>,
    /// High-time threshold of an extremes probe, ns (None: not counted).
    #[serde(default)]
    pub high_threshold_ns: Option<f64>,
    /// Low-time threshold of an extremes probe, ns (None: not counted).
    #[serde(default)]
    pub low_threshold_ns: Option<f64>,
}

/// How a probe observes its clock (PROTOCOL.md §5.1, probe classes).
#[derive(Clone, Copy, Debug, Default, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum ProbeClass {
    /// Every edge stamped (or bursts of stamped edges): EDGES.
    #[default]
    Stamping,
    /// Reciprocal count windows with level samples, as the ATmega328P reference probe at MHz
    /// rates: COUNT.
    Counting,
    /// Every cycle timed, each window's extremes and threshold counts sent: EXTREMES,
    /// VIOLATIONS.
    Extremes,
}

impl ProbeClass {
    /// Every class, as `--probe-class` names them.
    pub const NAMES: &'static [&'static str] = &["stamping", "counting", "extremes"];

    /// The class of a `--probe-class` word.
    pub fn parse(word: &str) -> Option<ProbeClass> {
        match word {
            "stamping" => Some(ProbeClass::Stamping),
            "counting" => Some(ProbeClass::Counting),
            "extremes" => Some(ProbeClass::Extremes),
            _ => None,
        }
    }

    /// Its word.
    pub fn word(self) -> &'static str {
        Self::NAMES[self as usize]
    }

    /// Its HELLO class byte.
    pub fn code(self) -> u8 {
        use firmware_protocol::classes;
        match self {
            ProbeClass::Stamping => classes::STAMPING,
            ProbeClass::Counting => classes::COUNTING,
            ProbeClass::Extremes => classes::EXTREMES,
        }
    }

    /// Its window when none is given, s: 100 ms counting (as the reference probe), 10 ms
    /// extremes.
    pub fn default_window_s(self) -> f64 {
        match self {
            ProbeClass::Counting => 0.1,
            _ => 0.01,
        }
    }
}

impl BenchModel {
    /// Names of the built-in scenarios of the demo machine.
    pub const SCENARIOS: &'static [&'static str] = &["steady", "sagging", "sweep"];

    /// A built-in scenario of the invented demo machine (see DESIGN.md §7).
    pub fn scenario(name: &str) -> Option<BenchModel> {
        let rails = vec![
            RailModel {
                ripple_mv: 12.0,
                noise_mv: 3.0,
                ..RailModel::quiet("VCC_NEAR", 5020.0)
            },
            RailModel {
                ripple_mv: 16.0,
                noise_mv: 4.0,
                ..RailModel::quiet("VCC_MID", 4960.0)
            },
            RailModel {
                ripple_mv: 24.0,
                noise_mv: 5.0,
                ..RailModel::quiet("VCC_FAR", 4880.0)
            },
        ];
        let steady = BenchModel {
            // 8 MHz crystal oscillator divided by 4: a clean 2 MHz at 50 % duty
            freq_hz: 2.0e6,
            duty: 0.5,
            jitter_rms_ns: 0.05,
            edge_jitter_rms_ns: 0.0,
            drift_ppm: 5.0,
            drift_period_s: 60.0,
            tick_ns: 8.0,
            glitch_rate_hz: 0.0,
            glitch_width_ns: 12.0,
            stall_rate_hz: 0.0,
            stall_periods: 20.0,
            rails,
            analog_rate_hz: 10_000.0,
            heartbeat_hz: 2.0,
            reset_interval_s: None,
            sweep: None,
            fault: None,
            seed: 1,
            burst_edges: None,
            burst_every_s: 0.1,
            probe_class: ProbeClass::Stamping,
            window_s: None,
            high_threshold_ns: None,
            low_threshold_ns: None,
        };
        match name {
            "steady" => Some(steady),
            "sagging" => {
                let mut m = steady;
                // the far section sags under load; its noisy ground bounces produce glitches
                m.rails[2].sag_rate_hz = 4.0;
                m.rails[2].sag_depth_mv = 380.0;
                m.rails[2].sag_ms = 30.0;
                m.rails[2].noise_mv = 9.0;
                m.rails[1].sag_rate_hz = 4.0;
                m.rails[1].sag_depth_mv = 120.0;
                m.rails[1].sag_ms = 30.0;
                m.glitch_rate_hz = 100.0;
                m.seed = 2;
                Some(m)
            }
            "sweep" => {
                let mut m = steady;
                // the RC oscillator turned up until the machine fails
                m.freq_hz = 1.0e6;
                m.jitter_rms_ns = 1.5;
                m.duty = 0.47;
                m.sweep = Some(Sweep {
                    from_hz: 1.0e6,
                    to_hz: 6.0e6,
                    over_s: 30.0,
                });
                m.seed = 3;
                Some(m)
            }
            _ => None,
        }
    }

    /// Nominal clock period at simulated time `t_s`, ns.
    pub fn period_at_ns(&self, t_s: f64) -> f64 {
        let f = match self.sweep {
            Some(s) => s.from_hz + (s.to_hz - s.from_hz) * (t_s / s.over_s).clamp(0.0, 1.0),
            None => self.freq_hz,
        };
        let drift = if self.drift_ppm != 0.0 && self.drift_period_s > 0.0 {
            1.0 + self.drift_ppm
                * 1e-6
                * (2.0 * std::f64::consts::PI * t_s / self.drift_period_s).sin()
        } else {
            1.0
        };
        1e9 / (f * drift)
    }

    /// Check the model's values; the message names the parameter.
    pub fn validate(&self) -> Result<(), String> {
        let pos = |v: f64, name: &str| {
            if v.is_finite() && v > 0.0 {
                Ok(())
            } else {
                Err(format!("{name} must be a positive number, got {v}"))
            }
        };
        pos(self.freq_hz, "--freq")?;
        pos(self.tick_ns, "--tick")?;
        pos(self.analog_rate_hz, "analog sample rate")?;
        if !(self.duty > 0.0 && self.duty < 1.0) {
            return Err(format!(
                "--duty must lie strictly between 0 and 1, got {}",
                self.duty
            ));
        }
        let nonneg = |v: f64, name: &str| {
            if v.is_finite() && v >= 0.0 {
                Ok(())
            } else {
                Err(format!("{name} must be ≥ 0, got {v}"))
            }
        };
        nonneg(self.jitter_rms_ns, "--jitter")?;
        nonneg(self.edge_jitter_rms_ns, "edge jitter")?;
        nonneg(self.glitch_rate_hz, "--glitch-rate")?;
        nonneg(self.stall_rate_hz, "--stall-rate")?;
        nonneg(self.heartbeat_hz, "--heartbeat")?;
        let period = 1e9 / self.freq_hz;
        if self.edge_jitter_rms_ns > period / 16.0 {
            return Err(format!(
                "edge jitter {} ns is more than 1/16 of the {period:.1} ns period: edges would cross",
                self.edge_jitter_rms_ns
            ));
        }
        if self.jitter_rms_ns > period / 8.0 {
            return Err(format!(
                "--jitter {} ns is more than 1/8 of the {period:.1} ns period: the clock would run backwards",
                self.jitter_rms_ns
            ));
        }
        if let Some(s) = self.sweep {
            pos(s.from_hz, "sweep start")?;
            pos(s.to_hz, "sweep end")?;
            pos(s.over_s, "--over")?;
        }
        if !(self.drift_ppm.is_finite() && self.drift_ppm.abs() <= MAX_DRIFT_PPM) {
            return Err(format!(
                "--drift-ppm must lie within ±{MAX_DRIFT_PPM} ppm (a 10 % swing), got {}",
                self.drift_ppm
            ));
        }
        pos(self.drift_period_s, "drift period")?;
        if !(self.stall_periods.is_finite() && (1.0..=1e6).contains(&self.stall_periods)) {
            return Err(format!(
                "--stall-periods must lie between 1 and 1 000 000 periods, got {}",
                self.stall_periods
            ));
        }
        if self.analog_rate_hz.is_nan() || self.analog_rate_hz > MAX_ANALOG_RATE_HZ {
            return Err(format!(
                "the analog sample rate must be at most {MAX_ANALOG_RATE_HZ} Hz per rail, got {}",
                self.analog_rate_hz
            ));
        }
        // the fastest clock the session reaches, at its drift's peak, must keep each phase at
        // least one tick long: a shorter phase is not representable at this tick
        let fastest_hz = self
            .sweep
            .map_or(self.freq_hz, |s| s.from_hz.max(s.to_hz).max(self.freq_hz))
            * (1.0 + self.drift_ppm.abs() * 1e-6);
        let shortest_phase_ns = 1e9 / fastest_hz * self.duty.min(1.0 - self.duty);
        if shortest_phase_ns < self.tick_ns {
            let limit_hz = 1e9 * self.duty.min(1.0 - self.duty)
                / self.tick_ns
                / (1.0 + self.drift_ppm.abs() * 1e-6);
            return Err(format!(
                "a {:.4} MHz clock at duty {} has phases of {shortest_phase_ns:.2} ns, shorter than \
                 its tick of {} ns: the virtual probe cannot represent it; stay at or below \
                 {:.4} MHz, or give a finer --tick",
                fastest_hz / 1e6,
                self.duty,
                self.tick_ns,
                limit_hz / 1e6
            ));
        }
        if let Some(r) = self.reset_interval_s {
            pos(r, "--reset-every")?;
        }
        self.validate_class()?;
        if let Some(n) = self.burst_edges {
            if n < 2 {
                return Err(format!(
                    "--bursts needs at least 2 edges per burst, got {n}"
                ));
            }
            pos(self.burst_every_s, "the burst interval")?;
        }
        if self.glitch_rate_hz > 0.0
            && !(self.glitch_width_ns.is_finite()
                && self.glitch_width_ns > 0.0
                && self.glitch_width_ns < shortest_phase_ns)
        {
            return Err(format!(
                "--glitch-width must be positive and shorter than the clock's shortest phase \
                 ({shortest_phase_ns:.2} ns), got {}",
                self.glitch_width_ns
            ));
        }
        if self.rails.len() > 8 {
            return Err("at most 8 rails".into());
        }
        for r in &self.rails {
            if r.name.is_empty() || r.name.len() > 16 {
                return Err(format!("rail name \"{}\" must have 1–16 bytes", r.name));
            }
            pos(r.nominal_mv, "rail voltage")?;
            if r.nominal_mv > ADC_FULL_SCALE_MV {
                return Err(format!(
                    "rail {} at {} mV is above the virtual probe's {ADC_FULL_SCALE_MV} mV input range",
                    r.name, r.nominal_mv
                ));
            }
            for (v, what) in [
                (r.ripple_mv, "ripple"),
                (r.hum_mv, "hum"),
                (r.noise_mv, "noise"),
            ] {
                nonneg(v, &format!("rail {} {what}", r.name))?;
            }
            pos(r.ripple_hz, &format!("rail {} ripple-freq", r.name))?;
            pos(r.hum_hz, &format!("rail {} hum-freq", r.name))?;
        }
        Ok(())
    }
}

impl BenchModel {
    /// The probe class's own settings, and the combinations no class has.
    fn validate_class(&self) -> Result<(), String> {
        let class = self.probe_class;
        if self.burst_edges.is_some() && class != ProbeClass::Stamping {
            return Err(format!(
                "--bursts stamps edges in bursts, which only a stamping probe does: a probe of \
                 class {} sends no timestamps; drop --bursts or use --probe-class stamping",
                class.word()
            ));
        }
        if self.window_s.is_some() && class == ProbeClass::Stamping {
            return Err(
                "--window sets the window of a counting or extremes probe: a stamping probe has \
                 none; add --probe-class counting or --probe-class extremes"
                    .into(),
            );
        }
        for (v, flag) in [
            (self.high_threshold_ns, "--high-threshold"),
            (self.low_threshold_ns, "--low-threshold"),
        ] {
            let Some(t) = v else { continue };
            if class != ProbeClass::Extremes {
                return Err(format!(
                    "{flag} is counted by a probe of window extremes only: a {} probe has no \
                     thresholds; add --probe-class extremes",
                    class.word()
                ));
            }
            let ticks = t / self.tick_ns;
            if !(ticks.is_finite() && ticks >= 1.0 && ticks <= f64::from(u32::MAX)) {
                return Err(format!(
                    "{flag} must lie between one tick ({} ns) and 2^32 - 1 ticks, got {t} ns",
                    self.tick_ns
                ));
            }
        }
        if let Some(w) = self.window_s {
            let ticks = w * 1e9 / self.tick_ns;
            if !(w.is_finite() && (1e-3..=10.0).contains(&w) && ticks <= f64::from(u32::MAX)) {
                return Err(format!(
                    "--window must lie between 1 ms and 10 s and be at most 2^32 - 1 ticks of {} \
                     ns, got {} ms",
                    self.tick_ns,
                    w * 1e3
                ));
            }
        } else if class != ProbeClass::Stamping
            && class.default_window_s() * 1e9 / self.tick_ns > f64::from(u32::MAX)
        {
            return Err(format!(
                "the default window of {} ms is more than 2^32 - 1 ticks of {} ns: give a shorter \
                 --window",
                class.default_window_s() * 1e3,
                self.tick_ns
            ));
        }
        Ok(())
    }
}

/// Largest frequency drift the virtual probe models (±10 %).
pub const MAX_DRIFT_PPM: f64 = 100_000.0;

/// Highest analog sample rate per rail the virtual probe models.
pub const MAX_ANALOG_RATE_HZ: f64 = 1e6;

/// Full scale of the virtual probe's ADC (12 bits at 2 mV per count).
pub const ADC_FULL_SCALE_MV: f64 = 8190.0;
/// µV per ADC count of the virtual probe.
pub const ADC_UV_PER_COUNT: i32 = 2000;

#[cfg(test)]
mod validate_tests {
    use super::*;

    fn steady() -> BenchModel {
        BenchModel::scenario("steady").unwrap()
    }

    /// Parameters that would make the virtual probe grow without bound, run backwards or emit
    /// a clock its tick cannot show are refused, naming the flag.
    #[test]
    fn impossible_sessions_are_refused_with_the_flag() {
        type Case = (Box<dyn Fn(&mut BenchModel)>, &'static str);
        let cases: Vec<Case> = vec![
            (Box::new(|m| m.drift_ppm = 1e12), "--drift-ppm"),
            (Box::new(|m| m.drift_ppm = f64::NAN), "--drift-ppm"),
            (Box::new(|m| m.stall_periods = -5.0), "--stall-periods"),
            (Box::new(|m| m.stall_periods = 1e9), "--stall-periods"),
            (Box::new(|m| m.analog_rate_hz = 1e9), "analog sample rate"),
            (Box::new(|m| m.rails[0].ripple_hz = 0.0), "ripple-freq"),
            (Box::new(|m| m.rails[0].hum_mv = -1.0), "hum"),
            (Box::new(|m| m.rails[0].hum_hz = f64::NAN), "hum-freq"),
            // 100 MHz at 50 % duty: 5 ns phases against an 8 ns tick
            (Box::new(|m| m.freq_hz = 100e6), "cannot represent"),
            (
                Box::new(|m| {
                    m.sweep = Some(Sweep {
                        from_hz: 1e6,
                        to_hz: 900e6,
                        over_s: 1.0,
                    })
                }),
                "cannot represent",
            ),
            (
                Box::new(|m| {
                    m.glitch_rate_hz = 5.0;
                    m.glitch_width_ns = 1e6;
                }),
                "--glitch-width",
            ),
            (
                Box::new(|m| m.reset_interval_s = Some(0.0)),
                "--reset-every",
            ),
        ];
        for (set, flag) in cases {
            let mut m = steady();
            set(&mut m);
            let e = m.validate().expect_err(flag);
            assert!(e.contains(flag), "{e}");
        }
        assert!(steady().validate().is_ok());
        // the limit itself: phases of exactly one tick are representable
        let mut m = steady();
        m.duty = 0.5;
        m.drift_ppm = 0.0;
        m.freq_hz = 1e9 / (2.0 * m.tick_ns);
        assert!(m.validate().is_ok(), "{:?}", m.validate());
    }
}

//! The bench model of the virtual probe: a clock, supply rails and logic lines, seeded and
//! deterministic, advanced in fixed slices of simulated time.
//!
//! Clock: each period is drawn independently, T_i = T(t) + N(0, σ) with σ the RMS period jitter
//! (an RC oscillator's successive periods are independent); the rising edge opens the period and
//! the falling edge follows after d·T_i, so the high time carries d·σ of jitter and the low time
//! (1 − d)·σ. White phase noise (a crystal's jitter) moves each regular edge by N(0, σ_e) about
//! its place, drawn per period from its own stream (glitch edges take none), so it does not
//! accumulate. T(t) follows the sweep (linear in frequency) and a slow sinusoidal drift.
//! Glitches are short extra pulses inside a phase (Poisson in time); stalls hold the clock low
//! for a number of periods. Rails: nominal − sag + ripple (sine, sawtooth or
//! triangle) + hum (a second sine) + noise (Gaussian), sags as
//! Poisson events with a depth and a duration. Lines: heartbeat square wave, reset pulses, and a
//! fault line that rises when the clock breaks a given timing limit at the lowest rail.

use rand::{Rng, SeedableRng};
use rand_distr::{Distribution, Normal, StandardNormal};
use rand_xoshiro::Xoshiro256PlusPlus;

use super::model::{ADC_UV_PER_COUNT, BenchModel, RailModel};

/// What happened in one slice of simulated time, in probe ticks, in time order per stream.
#[derive(Default, Debug)]
pub struct Slice {
    /// Clock edge ticks (alternating, first polarity in `clock_first_rising`).
    pub clock: Vec<u64>,
    /// Polarity of `clock[0]`.
    pub clock_first_rising: bool,
    /// Heartbeat changes (tick, new level).
    pub heartbeat: Vec<(u64, bool)>,
    /// Fault line changes.
    pub fault: Vec<(u64, bool)>,
    /// Reset line changes.
    pub reset: Vec<(u64, bool)>,
    /// Per rail: (first sample tick, raw ADC counts).
    pub rails: Vec<(u64, Vec<u16>)>,
}

struct RailState {
    rng: Xoshiro256PlusPlus,
    next_sag_s: f64,
    sag_start_s: f64,
}

/// The running simulation.
pub struct Bench {
    /// Parameters.
    pub model: BenchModel,
    t_ns: f64,
    level_high: bool,
    /// ns until the falling edge of the current period (when high)
    fall_at_ns: f64,
    next_rise_ns: f64,
    phase_ticks: f64,
    last_tick: Option<u64>,
    clock_rng: Xoshiro256PlusPlus,
    event_rng: Xoshiro256PlusPlus,
    rails: Vec<RailState>,
    next_sample_ns: f64,
    heartbeat_level: bool,
    next_heartbeat_ns: f64,
    faulted: bool,
    next_reset_ns: f64,
    reset_high_until_ns: Option<f64>,
    jitter: Option<Normal<f64>>,
    edge_rng: Xoshiro256PlusPlus,
    edge_jitter: Option<Normal<f64>>,
    ticks_per_ns: f64,
    /// Clock cycles simulated.
    pub cycles: u64,
}

/// SplitMix64 step, to derive independent stream seeds from one seed.
fn split(seed: &mut u64) -> u64 {
    *seed = seed.wrapping_add(0x9E37_79B9_7F4A_7C15);
    let mut z = *seed;
    z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
    z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
    z ^ (z >> 31)
}

fn exp_interval(rng: &mut Xoshiro256PlusPlus, rate_hz: f64) -> f64 {
    if rate_hz <= 0.0 {
        return f64::INFINITY;
    }
    let u: f64 = rng.random::<f64>().max(1e-300);
    -u.ln() / rate_hz
}

impl Bench {
    /// Start the bench at simulated time 0.
    pub fn new(model: BenchModel) -> Bench {
        let mut s = model.seed;
        let mut clock_rng = Xoshiro256PlusPlus::seed_from_u64(split(&mut s));
        let mut event_rng = Xoshiro256PlusPlus::seed_from_u64(split(&mut s));
        let rails = model
            .rails
            .iter()
            .map(|r| {
                let mut rng = Xoshiro256PlusPlus::seed_from_u64(split(&mut s));
                let first = exp_interval(&mut rng, r.sag_rate_hz);
                RailState {
                    rng,
                    next_sag_s: first,
                    sag_start_s: f64::NEG_INFINITY,
                }
            })
            .collect();
        // after the others, so that their streams are what they were before this one existed
        let edge_rng = Xoshiro256PlusPlus::seed_from_u64(split(&mut s));
        let edge_jitter = (model.edge_jitter_rms_ns > 0.0)
            .then(|| Normal::new(0.0, model.edge_jitter_rms_ns).expect("validated edge jitter"));
        let phase_ticks = clock_rng.random::<f64>();
        let first_rise = 50.0 + event_rng.random::<f64>() * 100.0;
        let jitter = (model.jitter_rms_ns > 0.0)
            .then(|| Normal::new(0.0, model.jitter_rms_ns).expect("validated jitter"));
        let heartbeat = if model.heartbeat_hz > 0.0 {
            0.5e9 / model.heartbeat_hz
        } else {
            f64::INFINITY
        };
        let reset = model.reset_interval_s.map_or(f64::INFINITY, |s| s * 1e9);
        Bench {
            t_ns: 0.0,
            level_high: false,
            fall_at_ns: 0.0,
            next_rise_ns: first_rise,
            phase_ticks,
            last_tick: None,
            clock_rng,
            event_rng,
            rails,
            next_sample_ns: 0.0,
            heartbeat_level: false,
            next_heartbeat_ns: heartbeat,
            faulted: false,
            next_reset_ns: reset,
            reset_high_until_ns: None,
            jitter,
            edge_rng,
            edge_jitter,
            ticks_per_ns: 1.0 / model.tick_ns,
            cycles: 0,
            model,
        }
    }

    /// Simulated time reached, ns.
    pub fn now_ns(&self) -> f64 {
        self.t_ns
    }

    /// Whether the machine is in its failed state (fault line high).
    pub fn faulted(&self) -> bool {
        self.faulted
    }

    #[inline]
    fn tick_of(&self, t_ns: f64) -> u64 {
        (t_ns * self.ticks_per_ns + self.phase_ticks) as u64
    }

    /// Deterministic part of a rail (no noise) at time t, updating its sag process.
    fn rail_mv(model: &RailModel, st: &mut RailState, t_s: f64) -> f64 {
        while t_s >= st.next_sag_s {
            st.sag_start_s = st.next_sag_s;
            st.next_sag_s += model.sag_ms * 1e-3 + exp_interval(&mut st.rng, model.sag_rate_hz);
        }
        let mut v = model.nominal_mv;
        let into = t_s - st.sag_start_s;
        let dur = model.sag_ms * 1e-3;
        if into >= 0.0 && into < dur && dur > 0.0 {
            // 10 % of the duration to fall, 60 % held, 30 % to recover
            let x = into / dur;
            let shape = if x < 0.1 {
                x / 0.1
            } else if x < 0.7 {
                1.0
            } else {
                (1.0 - x) / 0.3
            };
            v -= model.sag_depth_mv * shape;
        }
        if model.ripple_mv > 0.0 {
            v += 0.5 * model.ripple_mv * model.ripple_shape.at(model.ripple_hz * t_s);
        }
        if model.hum_mv > 0.0 {
            v += 0.5 * model.hum_mv * (2.0 * std::f64::consts::PI * model.hum_hz * t_s).sin();
        }
        v
    }

    /// Advance by `dt_ns` of simulated time; returns what the probe saw.
    pub fn advance(&mut self, dt_ns: f64, out: &mut Slice) {
        out.clock.clear();
        out.heartbeat.clear();
        out.fault.clear();
        out.reset.clear();
        out.rails
            .resize_with(self.model.rails.len(), Default::default);
        for r in &mut out.rails {
            r.1.clear();
        }
        let end = self.t_ns + dt_ns;

        // rails first: their lowest value in this slice judges the clock
        let mut floor_mv = f64::INFINITY;
        let interval = 1e9 / self.model.analog_rate_hz;
        let first_sample = self.next_sample_ns;
        let mut t = first_sample;
        while t < end {
            let ts = t * 1e-9;
            for (i, (rm, st)) in self
                .model
                .rails
                .iter()
                .zip(self.rails.iter_mut())
                .enumerate()
            {
                let v = Self::rail_mv(rm, st, ts);
                floor_mv = floor_mv.min(v);
                let noise: f64 = if rm.noise_mv > 0.0 {
                    rm.noise_mv * Distribution::<f64>::sample(&StandardNormal, &mut st.rng)
                } else {
                    0.0
                };
                let counts = ((v + noise) * 1000.0 / f64::from(ADC_UV_PER_COUNT)).round();
                out.rails[i].1.push(counts.clamp(0.0, 4095.0) as u16);
            }
            t += interval;
        }
        let first_tick = self.tick_of(first_sample);
        for r in &mut out.rails {
            r.0 = first_tick;
        }
        self.next_sample_ns = t;
        let limit = self.model.fault.as_ref().map(|f| {
            f.at(if floor_mv.is_finite() {
                floor_mv / 1000.0
            } else {
                5.0
            })
        });

        // clock: the nominal period (sweep, drift) moves in steps of one slice
        let mut first_set = false;
        let duty = self.model.duty;
        let base = self.model.period_at_ns(self.t_ns * 1e-9);
        loop {
            let next = if self.level_high {
                self.fall_at_ns
            } else {
                self.next_rise_ns
            };
            if next >= end {
                break;
            }
            if !self.level_high {
                // a new period starts with this rising edge
                let j = self.jitter.map_or(0.0, |n| n.sample(&mut self.clock_rng));
                let period = (base + j).max(base * 0.25);
                let high = duty * period;
                let low = period - high;
                // white phase noise: this rise and its fall move about their places
                let (er, ef) = match self.edge_jitter {
                    Some(n) => (n.sample(&mut self.edge_rng), n.sample(&mut self.edge_rng)),
                    None => (0.0, 0.0),
                };
                let next_ideal = next;
                let next = next + er;
                self.fall_at_ns = next_ideal + high + ef;
                self.next_rise_ns = next_ideal + period;
                self.cycles += 1;
                if let Some((l, h, p)) = limit
                    && !self.faulted
                    && (high < h || low < l || period < p)
                {
                    self.faulted = true;
                    out.fault.push((self.tick_of(next), true));
                }
                // a stall: the clock holds low for a while after this period
                if self.model.stall_rate_hz > 0.0
                    && self.event_rng.random::<f64>() < self.model.stall_rate_hz * period * 1e-9
                {
                    self.next_rise_ns += self.model.stall_periods * period;
                }
                // a glitch inside the high or the low phase
                if self.model.glitch_rate_hz > 0.0
                    && self.event_rng.random::<f64>() < self.model.glitch_rate_hz * period * 1e-9
                {
                    let in_high = self.event_rng.random::<bool>();
                    let (start, len) = if in_high {
                        (next, high)
                    } else {
                        (self.fall_at_ns, self.next_rise_ns - self.fall_at_ns)
                    };
                    let w = self.model.glitch_width_ns.min(len * 0.3);
                    let at = start + len * (0.2 + 0.4 * self.event_rng.random::<f64>());
                    self.emit(next, true, &mut first_set, out);
                    if in_high {
                        self.emit(at, false, &mut first_set, out);
                        self.emit(at + w, true, &mut first_set, out);
                    } else {
                        let fall = self.fall_at_ns;
                        self.emit(fall, false, &mut first_set, out);
                        self.emit(at, true, &mut first_set, out);
                        self.emit(at + w, false, &mut first_set, out);
                        // the regular fall is already out: skip it
                        self.level_high = false;
                        continue;
                    }
                    self.level_high = true;
                    continue;
                }
                self.emit(next, true, &mut first_set, out);
                self.level_high = true;
            } else {
                self.emit(next, false, &mut first_set, out);
                self.level_high = false;
            }
        }

        // lines
        while self.next_heartbeat_ns < end {
            let t = self.next_heartbeat_ns;
            self.next_heartbeat_ns += 0.5e9 / self.model.heartbeat_hz;
            if !self.faulted {
                self.heartbeat_level = !self.heartbeat_level;
                out.heartbeat.push((self.tick_of(t), self.heartbeat_level));
            }
        }
        if let Some(until) = self.reset_high_until_ns
            && until < end
        {
            out.reset.push((self.tick_of(until), false));
            self.reset_high_until_ns = None;
        }
        while self.next_reset_ns < end {
            let t = self.next_reset_ns;
            self.next_reset_ns += self.model.reset_interval_s.unwrap_or(f64::INFINITY) * 1e9;
            out.reset.push((self.tick_of(t), true));
            self.reset_high_until_ns = Some(t + 1e6);
            if self.faulted {
                self.faulted = false;
                out.fault.push((self.tick_of(t), false));
            }
        }
        self.t_ns = end;
    }

    fn emit(&mut self, t_ns: f64, rising: bool, first_set: &mut bool, out: &mut Slice) {
        let mut tick = self.tick_of(t_ns);
        // a probe cannot stamp two edges in one tick: a narrower pulse comes out one tick wide
        if let Some(last) = self.last_tick
            && tick <= last
        {
            tick = last + 1;
        }
        if !*first_set {
            out.clock_first_rising = rising;
            *first_set = true;
        }
        out.clock.push(tick);
        self.last_tick = Some(tick);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sim::model::FaultLimit;

    fn run(model: BenchModel, seconds: f64) -> (Vec<u64>, bool) {
        let mut b = Bench::new(model);
        let mut s = Slice::default();
        let mut all = Vec::new();
        let mut first = None;
        for _ in 0..(seconds * 1000.0) as usize {
            b.advance(1e6, &mut s);
            if first.is_none() && !s.clock.is_empty() {
                first = Some(s.clock_first_rising);
            }
            all.extend_from_slice(&s.clock);
        }
        (all, first.unwrap_or(true))
    }

    #[test]
    fn steady_clock_has_the_set_frequency_and_duty() {
        let mut m = BenchModel::scenario("steady").unwrap();
        m.tick_ns = 1.0;
        m.jitter_rms_ns = 0.0;
        m.drift_ppm = 0.0;
        let (edges, first_rising) = run(m, 0.01);
        assert!(first_rising);
        let periods: Vec<u64> = edges.windows(3).step_by(2).map(|w| w[2] - w[0]).collect();
        let mean = periods.iter().sum::<u64>() as f64 / periods.len() as f64;
        assert!((mean - 500.0).abs() < 1.0, "{mean}");
        let highs: Vec<u64> = edges.chunks_exact(2).map(|c| c[1] - c[0]).collect();
        let h = highs.iter().sum::<u64>() as f64 / highs.len() as f64;
        assert!((h - 250.0).abs() < 1.0, "{h}");
    }

    #[test]
    fn same_seed_same_edges_different_seed_different() {
        let m = BenchModel::scenario("sweep").unwrap();
        let (a, _) = run(m.clone(), 0.005);
        let (b, _) = run(m.clone(), 0.005);
        assert_eq!(a, b);
        let mut m2 = m;
        m2.seed = 99;
        let (c, _) = run(m2, 0.005);
        assert_ne!(a, c);
    }

    #[test]
    fn edges_strictly_increase_with_glitches_and_stalls() {
        let mut m = BenchModel::scenario("sagging").unwrap();
        m.glitch_rate_hz = 5000.0;
        m.stall_rate_hz = 200.0;
        let (edges, _) = run(m, 0.05);
        assert!(edges.windows(2).all(|w| w[0] < w[1]));
        assert!(edges.len() > 150_000);
    }

    #[test]
    fn fault_rises_when_the_limit_is_broken() {
        let mut m = BenchModel::scenario("sweep").unwrap();
        // fail when a phase is shorter than 125 ns (4 MHz at 50 %), at any supply
        m.fault = Some(FaultLimit {
            by_vcc: vec![(0.0, 125.0, 125.0, 250.0), (10.0, 125.0, 125.0, 250.0)],
            source: "test".into(),
        });
        let mut b = Bench::new(m);
        let mut s = Slice::default();
        let mut fault_at = None;
        for ms in 0..30_000 {
            b.advance(1e6, &mut s);
            if !s.fault.is_empty() {
                fault_at = Some(ms);
                break;
            }
        }
        // the high phase (47 % duty) reaches 125 ns at f = 0.47/125 ns = 3.76 MHz, i.e. after
        // (3.76 − 1)/(6 − 1) × 30 s = 16.56 s of the sweep; jitter brings it slightly earlier
        let t = fault_at.expect("fault rises") as f64 / 1000.0;
        assert!((15.5..16.7).contains(&t), "fault at {t} s");
        assert!(b.faulted());
    }
}

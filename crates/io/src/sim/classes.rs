//! The virtual probe's clock input as a counting or an extremes probe sees it: the bench's
//! edge ticks in, COUNT or EXTREMES and VIOLATIONS bodies out, window by window.
//!
//! Counting (as the ATmega328P reference probe at MHz rates): reciprocal windows — the whole
//! cycles between the first and the last rising edge of each window and their span — and level
//! samples at pseudo-random times. Extremes (as an RP2040 probe would time them): every cycle's
//! high and low time, each window's extremes, sums and a coarse period histogram, and the
//! phases shorter than the thresholds, the first few stamped. Windows follow each other without
//! gaps from the tick streaming began; a window closes once the bench's time is a slice past
//! its end (no later edge can still fall in it).

use firmware_protocol::{
    CountWindow, ExtremesWindow, MAX_BODY, Message, ShortPhase, Violations, methods,
};

use super::model::ProbeClass;

/// Bins of the extremes histogram.
const BINS: usize = 16;
/// Short phases stamped per window.
const STAMPS: usize = 8;
/// Level samples per count window (as the reference probe's default).
pub const DUTY_SAMPLES: u32 = 1000;

/// The settings a host may change (CONFIGURE) and the histogram's layout.
#[derive(Clone, Copy, Debug)]
pub struct ClassSettings {
    /// Window length, ticks.
    pub window_ticks: u32,
    /// High-time threshold, ticks (0: off).
    pub high_threshold: u32,
    /// Low-time threshold, ticks (0: off).
    pub low_threshold: u32,
    /// Level samples per count window.
    pub duty_samples: u32,
    /// Histogram: lower edge of the first bin and bin width, ticks.
    pub bins: (u32, u32),
}

#[derive(Clone, Copy)]
struct WindowSums {
    cycles: u32,
    high: (u32, u32),
    low: (u32, u32),
    period: (u32, u32),
    high_sum: u64,
    low_sum: u64,
    hist: [u32; BINS],
    high_short: u32,
    low_short: u32,
    // counting: rising edges in the window, the first and last one, samples
    rises: u32,
    first_rise: u64,
    last_rise: u64,
    samples_high: u32,
}

impl WindowSums {
    fn new() -> WindowSums {
        WindowSums {
            cycles: 0,
            high: (u32::MAX, 0),
            low: (u32::MAX, 0),
            period: (u32::MAX, 0),
            high_sum: 0,
            low_sum: 0,
            hist: [0; BINS],
            high_short: 0,
            low_short: 0,
            rises: 0,
            first_rise: 0,
            last_rise: 0,
            samples_high: 0,
        }
    }
}

/// A counting or extremes probe's clock input.
pub struct ClassInput {
    class: ProbeClass,
    channel: u8,
    /// What the host set.
    pub settings: ClassSettings,
    level: Option<bool>,
    last_rise: Option<u64>,
    last_fall: Option<u64>,
    win_start: Option<u64>,
    sums: WindowSums,
    stamps: Vec<ShortPhase>,
    /// Level sample ticks of the open count window still to take, latest first.
    sample_ticks: Vec<u64>,
    rng: u64,
    /// Windows lost before the next one (the link dropped frames).
    pub lost: bool,
    /// Cycles timed (extremes) or rising edges counted (counting).
    pub cycles: u64,
}

fn clamp_u32(v: u64) -> u32 {
    u32::try_from(v).unwrap_or(u32::MAX)
}

impl ClassInput {
    /// Channel `channel` of a probe of `class` with these settings; `seed` draws the level
    /// samples.
    pub fn new(class: ProbeClass, channel: u8, settings: ClassSettings, seed: u64) -> ClassInput {
        ClassInput {
            class,
            channel,
            settings,
            level: None,
            last_rise: None,
            last_fall: None,
            win_start: None,
            sums: WindowSums::new(),
            stamps: Vec::with_capacity(STAMPS),
            sample_ticks: Vec::new(),
            rng: seed | 1,
            lost: false,
            cycles: 0,
        }
    }

    /// Streaming starts at `tick`: the first window opens there.
    pub fn open_at(&mut self, tick: u64) {
        if self.win_start.is_none() {
            self.win_start = Some(tick);
            self.fresh_window(tick);
        }
    }

    fn next_rand(&mut self) -> u64 {
        // xorshift64* (Marsaglia 2003; Vigna's multiplier)
        self.rng ^= self.rng >> 12;
        self.rng ^= self.rng << 25;
        self.rng ^= self.rng >> 27;
        self.rng.wrapping_mul(0x2545_F491_4F6C_DD1D)
    }

    fn fresh_window(&mut self, start: u64) {
        self.sums = WindowSums::new();
        self.stamps.clear();
        if self.class == ProbeClass::Counting {
            let w = u64::from(self.settings.window_ticks).max(1);
            let mut ticks: Vec<u64> = (0..self.settings.duty_samples)
                .map(|_| start + self.next_rand() % w)
                .collect();
            ticks.sort_unstable_by(|a, b| b.cmp(a));
            self.sample_ticks = ticks;
        }
    }

    /// Level samples due before `tick` read the level held until then.
    fn take_samples(&mut self, before: u64) {
        let high = self.level == Some(true);
        while self.sample_ticks.last().is_some_and(|&t| t < before) {
            self.sample_ticks.pop();
            self.sums.samples_high += u32::from(high);
        }
    }

    /// Edges of one slice (alternating from `first_rising`), then every window that ended a
    /// slice before `now_tick` closes: its bodies go to `out` (type, body).
    pub fn feed(
        &mut self,
        ticks: &[u64],
        first_rising: bool,
        now_tick: u64,
        slice_ticks: u64,
        out: &mut impl FnMut(u8, &[u8]),
    ) {
        let mut rising = first_rising;
        for &t in ticks {
            self.close_until(t, out);
            self.edge(t, rising);
            rising = !rising;
        }
        self.close_until(now_tick.saturating_sub(slice_ticks), out);
    }

    /// Close every window that ends at or before `tick`.
    fn close_until(&mut self, tick: u64, out: &mut impl FnMut(u8, &[u8])) {
        let Some(mut start) = self.win_start else {
            return;
        };
        let w = u64::from(self.settings.window_ticks).max(1);
        while start + w <= tick {
            self.take_samples(start + w);
            self.emit(start, out);
            start += w;
            self.win_start = Some(start);
            self.fresh_window(start);
        }
    }

    fn edge(&mut self, t: u64, rising: bool) {
        self.take_samples(t);
        self.level = Some(rising);
        if !rising {
            self.last_fall = Some(t);
            return;
        }
        let s = &mut self.sums;
        if s.rises == 0 {
            s.first_rise = t;
        }
        s.rises += 1;
        s.last_rise = t;
        if self.class == ProbeClass::Counting {
            self.cycles += 1;
        }
        if let (Some(r), Some(f)) = (self.last_rise, self.last_fall)
            && r < f
            && self.class == ProbeClass::Extremes
        {
            let (h, l) = (clamp_u32(f - r), clamp_u32(t - f));
            let p = clamp_u32(t - r);
            s.cycles += 1;
            s.high = (s.high.0.min(h), s.high.1.max(h));
            s.low = (s.low.0.min(l), s.low.1.max(l));
            s.period = (s.period.0.min(p), s.period.1.max(p));
            s.high_sum += u64::from(h);
            s.low_sum += u64::from(l);
            let (origin, width) = self.settings.bins;
            let bin = (p.saturating_sub(origin) / width.max(1)) as usize;
            s.hist[bin.min(BINS - 1)] += 1;
            let cfg = self.settings;
            if h < cfg.high_threshold {
                s.high_short += 1;
                if self.stamps.len() < STAMPS {
                    self.stamps.push(ShortPhase {
                        tick: r,
                        length_ticks: h,
                        high: true,
                    });
                }
            }
            if l < cfg.low_threshold {
                s.low_short += 1;
                if self.stamps.len() < STAMPS {
                    self.stamps.push(ShortPhase {
                        tick: f,
                        length_ticks: l,
                        high: false,
                    });
                }
            }
            self.cycles += 1;
        }
        self.last_rise = Some(t);
    }

    fn emit(&mut self, start: u64, out: &mut impl FnMut(u8, &[u8])) {
        let s = self.sums;
        let w = self.settings.window_ticks;
        let flags = u8::from(std::mem::take(&mut self.lost));
        let mut body = [0u8; MAX_BODY];
        match self.class {
            ProbeClass::Counting => {
                let counted = s.rises >= 2;
                let m = Message::Count(CountWindow {
                    channel: self.channel,
                    method: methods::RECIPROCAL,
                    start_tick: if counted { s.first_rise } else { start },
                    gate_ticks: if counted {
                        clamp_u32(s.last_rise - s.first_rise)
                    } else {
                        0
                    },
                    edges: if counted { s.rises - 1 } else { 0 },
                    samples: self.settings.duty_samples,
                    samples_high: s.samples_high,
                });
                if let Ok(n) = m.encode_body(&mut body) {
                    out(m.msg_type(), &body[..n]);
                }
            }
            ProbeClass::Extremes => {
                let any = s.cycles > 0;
                let z = |v: (u32, u32)| if any { v } else { (0, 0) };
                let mut bins = [0u8; BINS * 4];
                for (b, c) in bins.chunks_exact_mut(4).zip(s.hist) {
                    b.copy_from_slice(&c.to_le_bytes());
                }
                let (h, l, p) = (z(s.high), z(s.low), z(s.period));
                let m = Message::Extremes(ExtremesWindow {
                    channel: self.channel,
                    flags,
                    start_tick: start,
                    window_ticks: w,
                    cycles: s.cycles,
                    high_min_ticks: h.0,
                    high_max_ticks: h.1,
                    low_min_ticks: l.0,
                    low_max_ticks: l.1,
                    period_min_ticks: p.0,
                    period_max_ticks: p.1,
                    high_sum_ticks: s.high_sum,
                    low_sum_ticks: s.low_sum,
                    bin_origin_ticks: self.settings.bins.0,
                    bin_width_ticks: self.settings.bins.1.max(1),
                    bins: &bins,
                });
                if let Ok(n) = m.encode_body(&mut body) {
                    out(m.msg_type(), &body[..n]);
                }
                let cfg = self.settings;
                if cfg.high_threshold > 0 || cfg.low_threshold > 0 {
                    let mut stamps = [0u8; STAMPS * 13];
                    let k = Violations::stamp_bytes(&self.stamps, &mut stamps);
                    let v = Message::Violations(Violations {
                        channel: self.channel,
                        flags,
                        start_tick: start,
                        window_ticks: w,
                        high_threshold_ticks: cfg.high_threshold,
                        low_threshold_ticks: cfg.low_threshold,
                        high_short: s.high_short,
                        low_short: s.low_short,
                        stamps: &stamps[..k],
                    });
                    if let Ok(n) = v.encode_body(&mut body) {
                        out(v.msg_type(), &body[..n]);
                    }
                }
            }
            ProbeClass::Stamping => {}
        }
    }
}

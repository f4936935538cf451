//! Supply rails: calibrated mV, min/mean/max, ripple, noise, time below a limit, sag events.

use serde::Serialize;

use crate::probe::AnalogScale;

use super::stats::{DevHistogram, IntStats};

/// Settings of the rail statistics.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RailConfig {
    /// Lower limit, mV (the logic family's minimum supply; 4.5 V for 74HC/HCT by default).
    pub limit_mv: f64,
    /// A sag starts this far below the running baseline, mV.
    pub sag_start_mv: f64,
    /// …and ends when the rail is back within this, mV (hysteresis).
    pub sag_end_mv: f64,
    /// Segment length for ripple and noise, ms.
    pub segment_ms: f64,
    /// Sag events kept.
    pub max_events: usize,
}

impl Default for RailConfig {
    fn default() -> Self {
        RailConfig {
            limit_mv: 4500.0,
            sag_start_mv: 100.0,
            sag_end_mv: 50.0,
            segment_ms: 10.0,
            max_events: 1000,
        }
    }
}

/// A sag: the rail dropped below its baseline.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Sag {
    /// Start, s of probe time.
    pub start_s: f64,
    /// Depth below the baseline at its lowest, mV.
    pub depth_mv: f64,
    /// Lowest value, mV.
    pub min_mv: f64,
    /// Duration, ms.
    pub duration_ms: f64,
}

/// Mergeable rail statistics of one block (raw ADC counts).
#[derive(Clone, Debug, PartialEq)]
pub struct RailAcc {
    /// Samples (raw counts).
    pub samples: IntStats,
    /// Samples below the limit.
    pub below: u64,
    /// Peak-to-peak of each segment (raw counts).
    pub segment_pkpk: DevHistogram,
    /// Sum of squared deviations from segment means (raw counts²).
    pub within_ss: f64,
    /// Degrees of freedom of `within_ss`.
    pub within_df: u64,
    /// Sags that started in this block.
    pub sags: u64,
    /// Deepest sag, mV.
    pub deepest_sag_mv: f64,
}

impl RailAcc {
    fn new(origin: i64) -> RailAcc {
        RailAcc {
            samples: IntStats::new(origin),
            below: 0,
            segment_pkpk: DevHistogram::new(0),
            within_ss: 0.0,
            within_df: 0,
            sags: 0,
            deepest_sag_mv: 0.0,
        }
    }
    /// Fold another block in.
    pub fn merge(&mut self, o: &RailAcc) {
        self.samples.merge(&o.samples);
        self.below += o.below;
        self.segment_pkpk.merge(&o.segment_pkpk);
        self.within_ss += o.within_ss;
        self.within_df += o.within_df;
        self.sags += o.sags;
        self.deepest_sag_mv = self.deepest_sag_mv.max(o.deepest_sag_mv);
    }
}

/// Running state of one analog channel.
#[derive(Clone, Debug)]
pub struct RailState {
    /// Settings.
    pub cfg: RailConfig,
    /// µV = raw × num / den + offset.
    pub scale: AnalogScale,
    tick_ns: f64,
    origin: Option<i64>,
    /// Current block.
    pub acc: Option<RailAcc>,
    seg: Vec<i64>,
    seg_start: u64,
    baseline_mv: Option<f64>,
    in_sag: Option<Sag>,
    /// Recent sags.
    pub sag_events: Vec<Sag>,
    /// Latest value, mV.
    pub last_mv: Option<f64>,
}

impl RailState {
    /// A rail with its scale and the probe tick.
    pub fn new(cfg: RailConfig, scale: AnalogScale, tick_ns: f64) -> RailState {
        RailState {
            cfg,
            scale,
            tick_ns,
            origin: None,
            acc: None,
            seg: Vec::new(),
            seg_start: 0,
            baseline_mv: None,
            in_sag: None,
            sag_events: Vec::new(),
            last_mv: None,
        }
    }

    /// mV of a raw count.
    pub fn mv(&self, raw: i64) -> f64 {
        self.scale.mv(raw as f64)
    }

    /// An empty block (None before the first sample).
    pub fn empty_acc(&self) -> Option<RailAcc> {
        self.origin.map(RailAcc::new)
    }

    /// One sample at `tick`, `interval_ticks` after the previous one: its raw count and its
    /// calibrated value (mV).
    pub fn sample(&mut self, tick: u64, raw: u16, mv: f64, interval_ticks: u32) {
        let raw = i64::from(raw);
        if self.origin.is_none() {
            self.origin = Some(raw);
            self.seg_start = tick;
        }
        if self.acc.is_none() {
            self.acc = self.empty_acc();
        }
        self.last_mv = Some(mv);
        let seg_ticks = (self.cfg.segment_ms * 1e6 / self.tick_ns) as u64;
        if tick.saturating_sub(self.seg_start) >= seg_ticks.max(1) {
            self.close_segment();
            self.seg_start = tick;
        }
        self.seg.push(raw);
        let a = self.acc.as_mut().expect("block exists");
        a.samples.add(raw, tick, 0);
        if mv < self.cfg.limit_mv {
            a.below += 1;
        }
        // sag detection with hysteresis around a slow baseline (time constant about 1 s)
        let t_s = tick as f64 * self.tick_ns * 1e-9;
        let base = *self.baseline_mv.get_or_insert(mv);
        match &mut self.in_sag {
            None => {
                if mv < base - self.cfg.sag_start_mv {
                    self.in_sag = Some(Sag {
                        start_s: t_s,
                        depth_mv: base - mv,
                        min_mv: mv,
                        duration_ms: 0.0,
                    });
                    a.sags += 1;
                } else {
                    let alpha = (f64::from(interval_ticks) * self.tick_ns * 1e-9).min(1.0);
                    self.baseline_mv = Some(base + alpha * (mv - base));
                }
            }
            Some(s) => {
                if mv < s.min_mv {
                    s.min_mv = mv;
                    s.depth_mv = base - mv;
                }
                if mv > base - self.cfg.sag_end_mv {
                    s.duration_ms = (t_s - s.start_s) * 1e3;
                    a.deepest_sag_mv = a.deepest_sag_mv.max(s.depth_mv);
                    if self.sag_events.len() < self.cfg.max_events {
                        self.sag_events.push(*s);
                    }
                    self.in_sag = None;
                }
            }
        }
    }

    fn close_segment(&mut self) {
        if self.seg.len() >= 2
            && let Some(a) = self.acc.as_mut()
        {
            let (lo, hi) = self
                .seg
                .iter()
                .fold((i64::MAX, i64::MIN), |(l, h), &v| (l.min(v), h.max(v)));
            a.segment_pkpk.record(hi - lo);
            let mean = self.seg.iter().sum::<i64>() as f64 / self.seg.len() as f64;
            a.within_ss += self
                .seg
                .iter()
                .map(|&v| (v as f64 - mean).powi(2))
                .sum::<f64>();
            a.within_df += self.seg.len() as u64 - 1;
        }
        self.seg.clear();
    }

    /// Break continuity (samples lost): close the segment, end a sag.
    pub fn break_continuity(&mut self) {
        self.close_segment();
        self.in_sag = None;
    }
}

/// One rail's figures.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct RailSnapshot {
    /// Channel id.
    pub channel: u8,
    /// Label, e.g. "VCC_FAR".
    pub name: String,
    /// Samples.
    pub samples: u64,
    /// Latest value.
    pub now_mv: Option<f64>,
    /// Lowest.
    pub min_mv: Option<f64>,
    /// When, s.
    pub min_at_s: Option<f64>,
    /// Mean.
    pub mean_mv: Option<f64>,
    /// Highest.
    pub max_mv: Option<f64>,
    /// Typical ripple: median peak-to-peak of 10 ms segments.
    pub ripple_pkpk_mv: Option<f64>,
    /// RMS noise about the segment means.
    pub noise_rms_mv: Option<f64>,
    /// Limit used, mV.
    pub limit_mv: f64,
    /// Time spent below the limit, s.
    pub below_limit_s: f64,
    /// Sag events that started in the window.
    pub sag_events: u64,
    /// Deepest sag, mV.
    pub deepest_sag_mv: f64,
    /// Resolution: one ADC count, mV.
    pub resolution_mv: f64,
}

/// Figures of one rail from a merged block.
pub fn snapshot(
    channel: u8,
    name: &str,
    acc: Option<&RailAcc>,
    st: &RailState,
    interval_s: f64,
) -> RailSnapshot {
    let lsb = st.scale.lsb_mv();
    let mut r = RailSnapshot {
        channel,
        name: name.to_string(),
        samples: 0,
        now_mv: st.last_mv,
        min_mv: None,
        min_at_s: None,
        mean_mv: None,
        max_mv: None,
        ripple_pkpk_mv: None,
        noise_rms_mv: None,
        limit_mv: st.cfg.limit_mv,
        below_limit_s: 0.0,
        sag_events: 0,
        deepest_sag_mv: 0.0,
        resolution_mv: lsb,
    };
    let Some(a) = acc else { return r };
    let s = &a.samples;
    r.samples = s.n;
    if s.n > 0 {
        r.min_mv = Some(st.mv(s.min));
        r.min_at_s = Some(s.min_at.0 as f64 * st.tick_ns * 1e-9);
        r.max_mv = Some(st.mv(s.max));
        r.mean_mv = s.mean().map(|m| st.scale.mv(m));
    }
    r.ripple_pkpk_mv = a.segment_pkpk.quantile(0.5).map(|v| v as f64 * lsb);
    if a.within_df > 0 {
        r.noise_rms_mv = Some((a.within_ss / a.within_df as f64).sqrt() * lsb);
    }
    r.below_limit_s = a.below as f64 * interval_s;
    r.sag_events = a.sags;
    r.deepest_sag_mv = a.deepest_sag_mv;
    r
}

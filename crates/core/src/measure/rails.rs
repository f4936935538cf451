//! Supply rails: calibrated mV, min/mean/max, ripple, noise, time below a limit, sag events.
//!
//! Ripple and noise are told apart per segment free of sags (`segment_ms`, 100 ms by default):
//! the periodic parts found in the segment (one or several, each with its harmonics: see
//! `ripple`) are the ripple, what is left is the noise.

use serde::Serialize;

use crate::probe::AnalogScale;

use super::ripple::{self, Scratch, SegmentFit};
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
    /// Segment length for ripple and noise, ms (several ripple periods; segments with a sag
    /// are left out).
    pub segment_ms: f64,
    /// A sag counts only when it lasts at least this long, ms.
    pub sag_min_ms: f64,
    /// …and goes deeper than this many times the rail's own noise RMS.
    pub sag_noise_factor: f64,
    /// Sag events kept.
    pub max_events: usize,
}

impl Default for RailConfig {
    fn default() -> Self {
        RailConfig {
            limit_mv: 4500.0,
            sag_start_mv: 100.0,
            sag_end_mv: 50.0,
            segment_ms: 100.0,
            sag_min_ms: 1.0,
            sag_noise_factor: 6.0,
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
    /// Sum of squares left beside the periodic parts of sag-free segments (raw counts²).
    pub resid_ss: f64,
    /// Degrees of freedom of `resid_ss`.
    pub resid_df: u64,
    /// Sag-free segments analysed.
    pub segments: u64,
    /// Sum of their ripple pk-pk (raw counts).
    pub ripple_pkpk_sum: f64,
    /// Sum of their ripple mean squares times their samples (raw counts²).
    pub ripple_ms_sum: f64,
    /// Samples of those segments.
    pub ripple_samples: u64,
    /// Sum of the first part's frequency over the segments with one (cycles per sample).
    pub ripple_cps_sum: f64,
    /// Segments with a periodic part.
    pub ripple_found: u64,
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
            resid_ss: 0.0,
            resid_df: 0,
            segments: 0,
            ripple_pkpk_sum: 0.0,
            ripple_ms_sum: 0.0,
            ripple_samples: 0,
            ripple_cps_sum: 0.0,
            ripple_found: 0,
            sags: 0,
            deepest_sag_mv: 0.0,
        }
    }
    /// Fold another block in.
    pub fn merge(&mut self, o: &RailAcc) {
        self.samples.merge(&o.samples);
        self.below += o.below;
        self.segment_pkpk.merge(&o.segment_pkpk);
        self.resid_ss += o.resid_ss;
        self.resid_df += o.resid_df;
        self.segments += o.segments;
        self.ripple_pkpk_sum += o.ripple_pkpk_sum;
        self.ripple_ms_sum += o.ripple_ms_sum;
        self.ripple_samples += o.ripple_samples;
        self.ripple_cps_sum += o.ripple_cps_sum;
        self.ripple_found += o.ripple_found;
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
    /// A sag touched the current segment (it is left out of ripple and noise).
    seg_sagged: bool,
    /// Session sums of squared lag-1 differences outside sags (raw counts²) and their count:
    /// the rail's own noise, which a sag must clear, until segments have shown it…
    noise_ss: f64,
    noise_n: u64,
    /// …as the session's residual beside the periodic parts (raw counts², degrees of freedom).
    resid_ss: f64,
    resid_df: u64,
    scratch: Scratch,
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
            seg_sagged: false,
            noise_ss: 0.0,
            noise_n: 0,
            resid_ss: 0.0,
            resid_df: 0,
            scratch: Scratch::default(),
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
        // sag detection with hysteresis around a slow baseline (time constant about 1 s); the
        // start threshold clears the rail's own noise
        let t_s = tick as f64 * self.tick_ns * 1e-9;
        let base = *self.baseline_mv.get_or_insert(mv);
        let noise_mv = if self.resid_df > 0 {
            (self.resid_ss / self.resid_df as f64).sqrt() * self.scale.lsb_mv()
        } else if self.noise_n > 0 {
            (self.noise_ss / self.noise_n as f64 / 2.0).sqrt() * self.scale.lsb_mv()
        } else {
            0.0
        };
        let start_mv = self
            .cfg
            .sag_start_mv
            .max(self.cfg.sag_noise_factor * noise_mv);
        match &mut self.in_sag {
            None => {
                if mv < base - start_mv {
                    self.in_sag = Some(Sag {
                        start_s: t_s,
                        depth_mv: base - mv,
                        min_mv: mv,
                        duration_ms: 0.0,
                    });
                    self.seg_sagged = true;
                } else {
                    let alpha = (f64::from(interval_ticks) * self.tick_ns * 1e-9).min(1.0);
                    self.baseline_mv = Some(base + alpha * (mv - base));
                    if let (false, Some(&prev)) = (self.seg_sagged, self.seg.iter().rev().nth(1)) {
                        let d = (raw - prev) as f64;
                        self.noise_ss += d * d;
                        self.noise_n += 1;
                    }
                }
            }
            Some(s) => {
                self.seg_sagged = true;
                if mv < s.min_mv {
                    s.min_mv = mv;
                    s.depth_mv = base - mv;
                }
                if mv > base - self.cfg.sag_end_mv {
                    s.duration_ms = (t_s - s.start_s) * 1e3;
                    // a dip shorter than the minimum is noise or a spike, not a sag
                    if s.duration_ms >= self.cfg.sag_min_ms {
                        a.sags += 1;
                        a.deepest_sag_mv = a.deepest_sag_mv.max(s.depth_mv);
                        if self.sag_events.len() < self.cfg.max_events {
                            self.sag_events.push(*s);
                        }
                    }
                    self.in_sag = None;
                }
            }
        }
    }

    fn close_segment(&mut self) {
        let sagged = std::mem::take(&mut self.seg_sagged) || self.in_sag.is_some();
        self.seg_sagged = self.in_sag.is_some();
        if self.seg.len() >= 3
            && let Some(a) = self.acc.as_mut()
        {
            let (lo, hi) = self
                .seg
                .iter()
                .fold((i64::MAX, i64::MIN), |(l, h), &v| (l.min(v), h.max(v)));
            a.segment_pkpk.record(hi - lo);
            if !sagged {
                let f: SegmentFit = ripple::analyse(&self.seg, &mut self.scratch);
                a.resid_ss += f.resid_ss;
                a.resid_df += f.resid_df;
                self.resid_ss += f.resid_ss;
                self.resid_df += f.resid_df;
                a.segments += 1;
                a.ripple_pkpk_sum += f.ripple_pkpk;
                a.ripple_ms_sum += f.ripple_ms * f.n as f64;
                a.ripple_samples += f.n as u64;
                if let Some(c) = f.cycles_per_sample {
                    a.ripple_cps_sum += c;
                    a.ripple_found += 1;
                }
            }
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
    /// Ripple: the periodic part (every tone and harmonic found in the data), peak to peak.
    pub ripple_pkpk_mv: Option<f64>,
    /// …and RMS.
    pub ripple_rms_mv: Option<f64>,
    /// The frequency of its strongest part, found in the data (None without ripple).
    pub ripple_hz: Option<f64>,
    /// Noise: the rest, RMS (white part, ADC step included).
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
        ripple_rms_mv: None,
        ripple_hz: None,
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
    if a.resid_df > 0 {
        r.noise_rms_mv = Some((a.resid_ss / a.resid_df as f64).sqrt() * lsb);
    }
    if a.segments > 0 {
        // each segment's reading is unbiased and about zero without ripple, so the mean over
        // segments is kept as it is, then clipped at zero
        let pkpk = (a.ripple_pkpk_sum / a.segments as f64).max(0.0);
        r.ripple_pkpk_mv = Some(pkpk * lsb);
        r.ripple_rms_mv = Some(
            (a.ripple_ms_sum / a.ripple_samples.max(1) as f64)
                .max(0.0)
                .sqrt()
                * lsb,
        );
        // a frequency when most segments found a periodic part
        if 2 * a.ripple_found > a.segments && interval_s > 0.0 && pkpk > 0.0 {
            r.ripple_hz = Some(a.ripple_cps_sum / a.ripple_found as f64 / interval_s);
        }
    }
    r.below_limit_s = a.below as f64 * interval_s;
    r.sag_events = a.sags;
    r.deepest_sag_mv = a.deepest_sag_mv;
    r
}

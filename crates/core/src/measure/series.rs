//! The time-resolved session: a bounded [`Series`] of per-interval figures (frequency, duty,
//! worst high and low time, glitches, stalls, fault-line rises, each rail's minimum and time
//! below its limit), so that a session whose clock moves can be judged interval by interval.
//!
//! The clock's points come from what the clock state already computes per short run (about
//! 20 ms of contiguous cycles, or one burst): a run is placed in the interval of its middle.
//! Intervals start at [`INTERVAL_S`]; when a session outgrows [`MAX_POINTS`] intervals,
//! neighbours are merged in pairs (the interval doubles), so memory stays bounded whatever the
//! session's length. Merging is exact for counts and extremes.

use serde::Serialize;

use super::clock::{ClockState, K, ShortRun};

/// Length of an interval before any merge, s.
pub const INTERVAL_S: f64 = 0.1;
/// Most intervals kept; past this, neighbours merge in pairs.
pub const MAX_POINTS: usize = 2048;

/// One interval of the session.
#[derive(Clone, Debug, PartialEq, Serialize)]
pub struct SeriesPoint {
    /// Start of the interval, s of probe time.
    pub from_s: f64,
    /// End of the interval, s.
    pub to_s: f64,
    /// Start of the first observed cycle in it (None: no clock observation), s.
    pub observed_from_s: Option<f64>,
    /// End of the last observed cycle in it, s.
    pub observed_to_s: Option<f64>,
    /// Short runs (or bursts) observed.
    pub runs: u32,
    /// Complete cycles observed.
    pub cycles: u64,
    /// Mean frequency of the observed cycles, Hz.
    pub frequency_hz: Option<f64>,
    /// Its expanded uncertainty (k = 2.5): the stamps' resolution and the scatter of the
    /// intervals about their local trend, Hz.
    pub frequency_uncertainty_hz: Option<f64>,
    /// Duty of the observed cycles (mean high / mean period).
    pub duty: Option<f64>,
    /// Shortest high time observed, ns (± one tick).
    pub high_min_ns: Option<f64>,
    /// Shortest low time observed, ns (± one tick).
    pub low_min_ns: Option<f64>,
    /// A lower bound of the shortest period: worst high + worst low, ns (a short run keeps no
    /// period minimum of its own; every period is one high and one low time).
    pub period_min_ns: Option<f64>,
    /// Glitches counted.
    pub glitches: u64,
    /// Probe time of the first glitch in it, s.
    pub first_glitch_s: Option<f64>,
    /// Stalls counted.
    pub stalls: u64,
    /// Probe time of the first stall in it, s.
    pub first_stall_s: Option<f64>,
    /// Rises of the fault line.
    pub fault_rises: u32,
    /// Each rail's minimum, mV, in the order of [`Series::rails`].
    pub rail_min_mv: Vec<Option<f64>>,
    /// Each rail's time below its limit, s.
    pub rail_below_s: Vec<f64>,
    /// Each rail's first sample below its limit, s.
    pub rail_first_below_s: Vec<Option<f64>>,
}

impl SeriesPoint {
    /// Middle of the observed cycles (or of the interval), s.
    pub fn at_s(&self) -> f64 {
        match (self.observed_from_s, self.observed_to_s) {
            (Some(a), Some(b)) => 0.5 * (a + b),
            _ => 0.5 * (self.from_s + self.to_s),
        }
    }

    /// The lowest rail in this interval (name index, mV).
    pub fn lowest_rail(&self) -> Option<(usize, f64)> {
        self.rail_min_mv
            .iter()
            .enumerate()
            .filter_map(|(i, m)| m.map(|m| (i, m)))
            .min_by(|a, b| a.1.total_cmp(&b.1))
    }
}

/// The time-resolved session (or the part of it in the recent window).
#[derive(Clone, Debug, Default, PartialEq, Serialize)]
pub struct Series {
    /// Length of each interval now (after merges), s.
    pub interval_s: f64,
    /// The probe tick, ns.
    pub resolution_ns: f64,
    /// Rail names, in the order of each point's rail lists.
    pub rails: Vec<String>,
    /// Each rail's limit, mV.
    pub rail_limits_mv: Vec<f64>,
    /// Intervals with anything observed, oldest first.
    pub points: Vec<SeriesPoint>,
}

impl Series {
    /// Index of a rail by name.
    pub fn rail_index(&self, name: &str) -> Option<usize> {
        self.rails.iter().position(|r| r == name)
    }

    /// The points that hold clock figures.
    pub fn clock_points(&self) -> impl Iterator<Item = &SeriesPoint> {
        self.points.iter().filter(|p| p.frequency_hz.is_some())
    }
}

#[derive(Clone, Debug)]
struct RailBucket {
    min_mv: f64,
    below_s: f64,
    first_below_s: Option<f64>,
}

impl RailBucket {
    fn new() -> RailBucket {
        RailBucket {
            min_mv: f64::INFINITY,
            below_s: 0.0,
            first_below_s: None,
        }
    }
    fn merge(&mut self, o: &RailBucket) {
        self.min_mv = self.min_mv.min(o.min_mv);
        self.below_s += o.below_s;
        self.first_below_s = earliest(self.first_below_s, o.first_below_s);
    }
}

/// One interval's sums and extremes.
#[derive(Clone, Debug)]
struct Bucket {
    runs: u32,
    cycles: u64,
    /// Σ cycles × mean period, ns.
    period_sum_ns: f64,
    /// Σ cycles × duty over runs with a duty.
    duty_sum: f64,
    duty_cycles: u64,
    high_min_ns: f64,
    low_min_ns: f64,
    observed: Option<(f64, f64)>,
    glitches: u64,
    first_glitch_s: Option<f64>,
    stalls: u64,
    first_stall_s: Option<f64>,
    fault_rises: u32,
    rails: Vec<RailBucket>,
    touched: bool,
}

fn earliest(a: Option<f64>, b: Option<f64>) -> Option<f64> {
    match (a, b) {
        (Some(x), Some(y)) => Some(x.min(y)),
        (x, y) => x.or(y),
    }
}

impl Bucket {
    fn new(rails: usize) -> Bucket {
        Bucket {
            runs: 0,
            cycles: 0,
            period_sum_ns: 0.0,
            duty_sum: 0.0,
            duty_cycles: 0,
            high_min_ns: f64::INFINITY,
            low_min_ns: f64::INFINITY,
            observed: None,
            glitches: 0,
            first_glitch_s: None,
            stalls: 0,
            first_stall_s: None,
            fault_rises: 0,
            rails: vec![RailBucket::new(); rails],
            touched: false,
        }
    }

    fn merge(&mut self, o: &Bucket) {
        self.runs += o.runs;
        self.cycles += o.cycles;
        self.period_sum_ns += o.period_sum_ns;
        self.duty_sum += o.duty_sum;
        self.duty_cycles += o.duty_cycles;
        self.high_min_ns = self.high_min_ns.min(o.high_min_ns);
        self.low_min_ns = self.low_min_ns.min(o.low_min_ns);
        self.observed = match (self.observed, o.observed) {
            (Some(a), Some(b)) => Some((a.0.min(b.0), a.1.max(b.1))),
            (a, b) => a.or(b),
        };
        self.glitches += o.glitches;
        self.first_glitch_s = earliest(self.first_glitch_s, o.first_glitch_s);
        self.stalls += o.stalls;
        self.first_stall_s = earliest(self.first_stall_s, o.first_stall_s);
        self.fault_rises += o.fault_rises;
        for (a, b) in self.rails.iter_mut().zip(&o.rails) {
            a.merge(b);
        }
        self.touched |= o.touched;
    }
}

/// What the series has taken from the clock state so far (to find what is new in it).
#[derive(Clone, Debug, Default)]
struct Seen {
    /// The newest finished short run taken.
    run: Option<ShortRun>,
    /// Glitches and stalls of the clock's current block taken.
    glitches: u64,
    stalls: u64,
    /// Glitch and stall events listed by the clock state taken.
    glitch_events: usize,
    stall_events: usize,
}

/// The engine's recorder of the series: intervals of one session, bounded.
#[derive(Clone, Debug)]
pub(super) struct SeriesRec {
    tick_ns: f64,
    origin_s: Option<f64>,
    width_s: f64,
    buckets: Vec<Bucket>,
    rails: Vec<(String, f64)>,
    seen: Seen,
}

impl SeriesRec {
    /// An empty series with no rails and a 1 ns tick.
    pub(super) fn new() -> SeriesRec {
        SeriesRec {
            tick_ns: 1.0,
            origin_s: None,
            width_s: INTERVAL_S,
            buckets: Vec::new(),
            rails: Vec::new(),
            seen: Seen::default(),
        }
    }

    /// The probe's tick and its rails (name, limit mV), in the engine's channel order.
    pub(super) fn install(&mut self, tick_ns: f64, rails: Vec<(String, f64)>) {
        *self = SeriesRec {
            tick_ns,
            rails,
            ..SeriesRec::new()
        };
    }

    /// The bucket of time `t_s` (None: before the series began, or not a time).
    fn bucket(&mut self, t_s: f64) -> Option<&mut Bucket> {
        if !t_s.is_finite() {
            return None;
        }
        let origin = *self
            .origin_s
            .get_or_insert_with(|| (t_s / INTERVAL_S).floor() * INTERVAL_S);
        if t_s < origin {
            return None;
        }
        while (t_s - origin) / self.width_s >= MAX_POINTS as f64 {
            self.merge_pairs();
        }
        let i = ((t_s - origin) / self.width_s) as usize;
        let n = self.rails.len();
        if self.buckets.len() <= i {
            self.buckets.resize_with(i + 1, || Bucket::new(n));
        }
        let b = &mut self.buckets[i];
        b.touched = true;
        Some(b)
    }

    fn merge_pairs(&mut self) {
        let n = self.rails.len();
        self.buckets = self
            .buckets
            .chunks(2)
            .map(|c| {
                let mut b = c[0].clone();
                if let Some(o) = c.get(1) {
                    b.merge(o);
                }
                b
            })
            .collect();
        if self.buckets.is_empty() {
            self.buckets.push(Bucket::new(n));
        }
        self.width_s *= 2.0;
    }

    /// A short run of the clock (finished, or the one being taken at a snapshot).
    pub(super) fn add_run(&mut self, r: &ShortRun) {
        if r.cycles == 0 || !(r.frequency_hz.is_finite() && r.frequency_hz > 0.0) {
            return;
        }
        let span_s = r.cycles as f64 / r.frequency_hz;
        let start_s = r.end_s - span_s;
        let Some(b) = self.bucket(r.end_s - 0.5 * span_s) else {
            return;
        };
        b.runs += 1;
        b.cycles += r.cycles;
        b.period_sum_ns += r.cycles as f64 * 1e9 / r.frequency_hz;
        if r.duty > 0.0 && r.duty.is_finite() {
            b.duty_sum += r.cycles as f64 * r.duty;
            b.duty_cycles += r.cycles;
        }
        // NaN (no high or low time in the run) leaves the minimum as it is
        if r.high_min_ns < b.high_min_ns {
            b.high_min_ns = r.high_min_ns;
        }
        if r.low_min_ns < b.low_min_ns {
            b.low_min_ns = r.low_min_ns;
        }
        b.observed = Some(match b.observed {
            Some((a, z)) => (a.min(start_s), z.max(r.end_s)),
            None => (start_s, r.end_s),
        });
    }

    /// One rail sample (`rail`: its index among the rails), `interval_s` after the previous.
    pub(super) fn rail_sample(&mut self, rail: usize, t_s: f64, mv: f64, interval_s: f64) {
        let Some(&(_, limit)) = self.rails.get(rail) else {
            return;
        };
        let Some(b) = self.bucket(t_s) else { return };
        let r = &mut b.rails[rail];
        r.min_mv = r.min_mv.min(mv);
        if mv < limit {
            r.below_s += interval_s;
            r.first_below_s = earliest(r.first_below_s, Some(t_s));
        }
    }

    /// The fault line rose at `t_s`.
    pub(super) fn fault_rise(&mut self, t_s: f64) {
        if let Some(b) = self.bucket(t_s) {
            b.fault_rises += 1;
        }
    }

    /// Take what is new in the (first) clock's state: finished short runs, glitches and stalls
    /// (placed at their own time when the state lists them, else at `now_s`).
    pub(super) fn watch(&mut self, clock: &ClockState, now_s: f64) {
        // the state keeps the last two finished runs: those after the one taken last are new
        let runs = clock.runs;
        let new_from = match self.seen.run {
            Some(s) if runs[1] == Some(s) => 2,
            Some(s) if runs[0] == Some(s) => 1,
            _ => 0,
        };
        for r in runs[new_from..].iter().flatten() {
            self.add_run(r);
        }
        if let Some(r) = runs[1] {
            self.seen.run = Some(r);
        }
        let (g, st) = clock
            .acc
            .as_ref()
            .map_or((0, 0), |a| (a.glitches, a.stalls));
        if g > self.seen.glitches {
            let n = g - self.seen.glitches;
            let at = clock
                .glitch_events
                .get(self.seen.glitch_events)
                .map_or(now_s, |e| e.at_s);
            if let Some(b) = self.bucket(at) {
                b.glitches += n;
                b.first_glitch_s = earliest(b.first_glitch_s, Some(at));
            }
        }
        if st > self.seen.stalls {
            let n = st - self.seen.stalls;
            let at = clock
                .stall_events
                .get(self.seen.stall_events)
                .map_or(now_s, |e| e.at_s);
            if let Some(b) = self.bucket(at) {
                b.stalls += n;
                b.first_stall_s = earliest(b.first_stall_s, Some(at));
            }
        }
        self.seen.glitches = g;
        self.seen.stalls = st;
        self.seen.glitch_events = clock.glitch_events.len();
        self.seen.stall_events = clock.stall_events.len();
    }

    /// The clock's block was closed: its counts start again from zero.
    pub(super) fn block_closed(&mut self) {
        self.seen.glitches = 0;
        self.seen.stalls = 0;
    }

    /// The series of the intervals that end after `since_s` (all of them with None).
    pub(super) fn series(&self, since_s: Option<f64>) -> Series {
        let origin = self.origin_s.unwrap_or(0.0);
        let mut points: Vec<SeriesPoint> = self
            .buckets
            .iter()
            .enumerate()
            .filter(|(_, b)| b.touched)
            .map(|(i, b)| self.point(origin + i as f64 * self.width_s, b))
            .filter(|p| since_s.is_none_or(|s| p.to_s > s))
            .collect();
        frequency_uncertainties(&mut points, self.tick_ns);
        Series {
            interval_s: self.width_s,
            resolution_ns: self.tick_ns,
            rails: self.rails.iter().map(|r| r.0.clone()).collect(),
            rail_limits_mv: self.rails.iter().map(|r| r.1).collect(),
            points,
        }
    }

    fn point(&self, from_s: f64, b: &Bucket) -> SeriesPoint {
        let finite = |v: f64| v.is_finite().then_some(v);
        let high = finite(b.high_min_ns);
        let low = finite(b.low_min_ns);
        SeriesPoint {
            from_s,
            to_s: from_s + self.width_s,
            observed_from_s: b.observed.map(|o| o.0),
            observed_to_s: b.observed.map(|o| o.1),
            runs: b.runs,
            cycles: b.cycles,
            frequency_hz: (b.cycles > 0 && b.period_sum_ns > 0.0)
                .then(|| 1e9 * b.cycles as f64 / b.period_sum_ns),
            frequency_uncertainty_hz: None,
            duty: (b.duty_cycles > 0).then(|| b.duty_sum / b.duty_cycles as f64),
            high_min_ns: high,
            low_min_ns: low,
            period_min_ns: high.zip(low).map(|(h, l)| h + l),
            glitches: b.glitches,
            first_glitch_s: b.first_glitch_s,
            stalls: b.stalls,
            first_stall_s: b.first_stall_s,
            fault_rises: b.fault_rises,
            rail_min_mv: b.rails.iter().map(|r| finite(r.min_mv)).collect(),
            rail_below_s: b.rails.iter().map(|r| r.below_s).collect(),
            rail_first_below_s: b.rails.iter().map(|r| r.first_below_s).collect(),
        }
    }
}

/// Median of r² over σ² for a normal r (the median of χ² with one degree of freedom).
const CHI2_1_MEDIAN: f64 = 0.454_936;

/// Each clock point's frequency uncertainty (k = 2.5), from its mean period's: the resolution
/// of its runs' end stamps (q/√6 per run, at random phase) and the period noise of its cycles
/// (white period jitter: σ/√n for a mean over n periods), σ estimated from how far each point's
/// mean period lies from the cubic through its two neighbours on either side (a smooth trend,
/// even a sweep, cancels). The median of those deviations keeps a real step of the clock from counting as
/// noise.
fn frequency_uncertainties(points: &mut [SeriesPoint], tick_ns: f64) {
    let clock: Vec<usize> = (0..points.len())
        .filter(|&i| points[i].frequency_hz.is_some())
        .collect();
    let period = |p: &SeriesPoint| p.frequency_hz.map(|f| 1e9 / f);
    // each point against the cubic through its two neighbours on either side (Lagrange
    // weights c_j): r = P_i − Σ c_j P_j, var(r) = σ² (1/n_i + Σ c_j²/n_j); r²/(…) estimates σ²
    let mut ratios: Vec<f64> = clock
        .windows(5)
        .filter_map(|w| {
            let i = &points[w[2]];
            let near = [&points[w[0]], &points[w[1]], &points[w[3]], &points[w[4]]];
            let ti = i.at_s();
            let t: Vec<f64> = near.iter().map(|p| p.at_s()).collect();
            let (mut predicted, mut var) = (0.0, 1.0 / i.cycles.max(1) as f64);
            for (j, p) in near.iter().enumerate() {
                let mut c = 1.0;
                for (k, &tk) in t.iter().enumerate() {
                    if k != j {
                        c *= (ti - tk) / (t[j] - tk);
                    }
                }
                predicted += c * period(p)?;
                var += c * c / p.cycles.max(1) as f64;
            }
            let r = period(i)? - predicted;
            Some(r * r / var)
        })
        .filter(|v| v.is_finite())
        .collect();
    let jitter2_ns2 = if ratios.len() >= 5 {
        ratios.sort_by(f64::total_cmp);
        ratios[ratios.len() / 2] / CHI2_1_MEDIAN
    } else {
        0.0
    };
    for &i in &clock {
        let p = &mut points[i];
        let (Some(f), Some(t)) = (p.frequency_hz, period(p)) else {
            continue;
        };
        let n = p.cycles.max(1) as f64;
        let res_ns = (p.runs.max(1) as f64).sqrt() * tick_ns / 6f64.sqrt() / n;
        let u_ns = (res_ns * res_ns + jitter2_ns2 / n).sqrt();
        p.frequency_uncertainty_hz = Some(K * f * u_ns / t);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(end_s: f64, f: f64, cycles: u64, high: f64, low: f64) -> ShortRun {
        ShortRun {
            end_s,
            cycles,
            frequency_hz: f,
            duty: high / (high + low),
            high_min_ns: high,
            low_min_ns: low,
        }
    }

    /// Runs fall into the interval of their middle; a point's frequency is its cycles over
    /// their total time and its extremes the runs' extremes.
    #[test]
    fn runs_make_points() {
        let mut s = SeriesRec::new();
        s.install(8.0, vec![("VCC".into(), 4500.0)]);
        // 1 MHz runs of 20 ms: 20 000 cycles each
        s.add_run(&run(0.02, 1e6, 20_000, 496.0, 488.0));
        s.add_run(&run(0.04, 1e6, 20_000, 480.0, 496.0));
        s.add_run(&run(0.06, 2e6, 20_000, 240.0, 248.0));
        s.rail_sample(0, 0.05, 4600.0, 0.001);
        s.rail_sample(0, 0.051, 4400.0, 0.001);
        s.fault_rise(0.15);
        let out = s.series(None);
        assert_eq!(out.points.len(), 2);
        let p = &out.points[0];
        // 60 000 cycles over 20 + 20 + 10 ms
        assert!((p.frequency_hz.unwrap() - 60_000.0 / 0.05).abs() < 1e-6);
        assert_eq!(p.high_min_ns, Some(240.0));
        assert_eq!(p.low_min_ns, Some(248.0));
        assert_eq!(p.period_min_ns, Some(488.0));
        assert_eq!(p.rail_min_mv, vec![Some(4400.0)]);
        assert!((p.rail_below_s[0] - 0.001).abs() < 1e-12);
        assert_eq!(p.rail_first_below_s[0], Some(0.051));
        assert_eq!(p.observed_from_s, Some(0.0));
        assert_eq!(out.points[1].fault_rises, 1);
        assert!(out.points[1].frequency_hz.is_none());
    }

    /// However long the session, the series stays within MAX_POINTS intervals, and merging
    /// keeps every count and extreme.
    #[test]
    fn long_sessions_stay_bounded_and_merges_keep_counts() {
        let mut s = SeriesRec::new();
        s.install(8.0, vec![("VCC".into(), 4500.0)]);
        let mut cycles = 0;
        for k in 0..100_000u64 {
            let t = k as f64 * 0.02;
            let low = if k == 77_777 { 300.0 } else { 500.0 };
            s.add_run(&run(t + 0.02, 1e6, 20_000, 500.0, low));
            s.rail_sample(0, t, 4900.0 - (k % 7) as f64, 0.02);
            cycles += 20_000;
        }
        let out = s.series(None);
        assert!(out.points.len() <= MAX_POINTS, "{}", out.points.len());
        assert!(out.interval_s > INTERVAL_S);
        assert_eq!(out.points.iter().map(|p| p.cycles).sum::<u64>(), cycles);
        let worst = out
            .points
            .iter()
            .filter_map(|p| p.low_min_ns)
            .fold(f64::INFINITY, f64::min);
        assert_eq!(worst, 300.0);
        let rail_min = out
            .points
            .iter()
            .filter_map(|p| p.rail_min_mv[0])
            .fold(f64::INFINITY, f64::min);
        assert_eq!(rail_min, 4894.0);
    }

    /// Times that are no time, or before the series began, or absurdly late, are taken
    /// without a panic (the late one squeezes the series, it stays bounded).
    #[test]
    fn odd_times_do_not_panic() {
        let mut s = SeriesRec::new();
        s.install(8.0, vec![]);
        s.add_run(&run(10.0, 1e6, 100, 500.0, 500.0));
        s.add_run(&run(1.0, 1e6, 100, 500.0, 500.0));
        s.add_run(&run(f64::NAN, 1e6, 100, 500.0, 500.0));
        s.add_run(&run(1e15, 1e6, 100, 500.0, 500.0));
        s.rail_sample(3, 11.0, 1.0, 1.0);
        let out = s.series(None);
        assert!(out.points.len() <= MAX_POINTS);
        assert_eq!(out.points.iter().map(|p| p.cycles).sum::<u64>(), 200);
    }

    /// The noise estimate: points whose mean periods scatter about a sweep as white period
    /// jitter of known σ would make them scatter give an uncertainty of about K σ/√n.
    #[test]
    fn uncertainty_follows_the_scatter_not_the_trend() {
        use rand::{Rng, SeedableRng};
        let mut rng = rand_xoshiro::Xoshiro256PlusPlus::seed_from_u64(7);
        let mut s = SeriesRec::new();
        s.install(8.0, vec![]);
        let (sigma_ns, n) = (2.0, 20_000u64); // period jitter, cycles per point
        for k in 0..400u64 {
            let t = 0.05 + k as f64 * 0.1;
            let period_ns = 1e9 / (1e6 + 1e5 * t); // a sweep of 100 kHz/s
            // a normal deviate (Box–Muller) for the mean of n periods
            let (u1, u2): (f64, f64) = (rng.random::<f64>().max(1e-300), rng.random());
            let e = (-2.0 * u1.ln()).sqrt() * (std::f64::consts::TAU * u2).cos();
            let mean = period_ns + e * sigma_ns / (n as f64).sqrt();
            s.add_run(&run(t + 0.01, 1e9 / mean, n, 400.0, 400.0));
        }
        let out = s.series(None);
        let p = &out.points[200];
        let rel = p.frequency_uncertainty_hz.unwrap() / p.frequency_hz.unwrap();
        let want = K * sigma_ns / (n as f64).sqrt() / (1e9 / p.frequency_hz.unwrap());
        assert!((rel / want - 1.0).abs() < 0.25, "{rel} vs {want}");
    }
}

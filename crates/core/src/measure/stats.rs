//! Building blocks: exact mergeable statistics of integer samples, deviation histograms, and the
//! Wilson score interval.

use hdrhistogram::Histogram;

/// Exact sums of a run of integer samples about its own minimum: the deviations of a run are
/// small even when the values are not, so the common case squares 32-bit numbers.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub struct RunSums {
    /// Samples.
    pub n: u64,
    /// Smallest sample (i64::MAX when empty).
    pub lo: i64,
    /// Largest sample (i64::MIN when empty).
    pub hi: i64,
    /// Σ(x − lo).
    pub sum_e: i128,
    /// Σ(x − lo)².
    pub sum_ee: i128,
}

impl RunSums {
    /// The sums of `x`, whose extremes `lo` and `hi` ([`extremes`]) the caller found while
    /// making it (one pass fewer).
    #[inline(always)]
    pub fn about(x: &[i64], lo: i64, hi: i64) -> RunSums {
        RunSums::about_weighted(x, lo, hi, false).0
    }

    /// [`RunSums::about`], and with `weighted` also Σk·(x_k − lo) over k = 0, 1, … in the same
    /// pass, when the run is narrow (range and length below 2^16; None otherwise).
    #[inline(always)]
    pub fn about_weighted(x: &[i64], lo: i64, hi: i64, weighted: bool) -> (RunSums, Option<u64>) {
        debug_assert_eq!((lo, hi), extremes(x));
        let mut r = RunSums {
            n: x.len() as u64,
            lo,
            hi,
            sum_e: 0,
            sum_ee: 0,
        };
        if x.is_empty() {
            return (r, None);
        }
        // deviations below 2^16 square below 2^32: up to 2^31 of them sum exactly in u64
        let range = i128::from(hi) - i128::from(lo);
        // (with the weights k < 2^16 too: k·(x − lo) below 2^32)
        if range < 1 << 16 && x.len() < 1 << 16 && weighted {
            let (s, ss, sk) = narrow_sums::<true>(x, lo);
            (r.sum_e, r.sum_ee) = (i128::from(s), i128::from(ss));
            return (r, Some(sk));
        }
        if range < 1 << 16 && x.len() < 1 << 31 {
            let (s, ss, _) = narrow_sums::<false>(x, lo);
            (r.sum_e, r.sum_ee) = (i128::from(s), i128::from(ss));
        } else {
            for &v in x {
                let e = i128::from(v) - i128::from(lo);
                r.sum_e += e;
                r.sum_ee = r.sum_ee.saturating_add(e.saturating_mul(e));
            }
        }
        (r, None)
    }

    /// Σx.
    pub fn sum(&self) -> i128 {
        self.sum_e + i128::from(self.n) * i128::from(self.lo)
    }
}

/// Σe, Σe² and, when `WEIGHTED`, Σk·e of the deviations e_k = x_k − lo; one loop, compiled
/// twice. The caller keeps them exact: every e below 2^32 and each sum below 2^64 (e.g. e below
/// 2^16 over fewer than 2^16 samples, as [`RunSums::about_weighted`]).
#[inline(always)]
pub fn narrow_sums<const WEIGHTED: bool>(x: &[i64], lo: i64) -> (u64, u64, u64) {
    let (mut s, mut ss, mut sk) = (0u64, 0u64, 0u64);
    for (k, &v) in x.iter().enumerate() {
        let e = u64::from(v.wrapping_sub(lo) as u32);
        s += e;
        ss += e * e;
        if WEIGHTED {
            sk += u64::from(k as u32) * e;
        }
    }
    (s, ss, sk)
}

/// The smallest and largest of `x` ((i64::MAX, i64::MIN) when empty).
#[inline(always)]
pub fn extremes(x: &[i64]) -> (i64, i64) {
    let (mut lo, mut hi) = (i64::MAX, i64::MIN);
    for &v in x {
        lo = lo.min(v);
        hi = hi.max(v);
    }
    (lo, hi)
}

/// Exact running statistics of integer samples (ticks): sums are kept as integers relative to a
/// fixed origin, so any chunking of the input gives the same result and blocks merge exactly.
#[derive(Clone, Debug, PartialEq)]
pub struct IntStats {
    /// Samples.
    pub n: u64,
    origin: i64,
    sum: i128,
    sumsq: i128,
    /// Smallest sample.
    pub min: i64,
    /// Where the smallest sample ended (tick) and its index (the earliest of equal ones).
    pub min_at: (u64, u64),
    /// Largest sample.
    pub max: i64,
}

impl IntStats {
    /// Empty statistics around `origin` (any typical value; only precision depends on it).
    pub fn new(origin: i64) -> IntStats {
        IntStats {
            n: 0,
            origin,
            sum: 0,
            sumsq: 0,
            min: i64::MAX,
            min_at: (0, 0),
            max: i64::MIN,
        }
    }

    /// Add one sample that ended at `tick`, the `index`-th of its kind.
    #[inline]
    pub fn add(&mut self, x: i64, tick: u64, index: u64) {
        let d = x - self.origin;
        self.n += 1;
        self.sum += i128::from(d);
        // a widening 64×64→128 multiply
        self.sumsq += i128::from(d) * i128::from(d);
        if x < self.min {
            self.min = x;
            self.min_at = (tick, index);
        }
        self.max = self.max.max(x);
    }

    /// Add `x[i]`, which ended at `ticks[i]` and is the `first_index + i`-th of its kind, for
    /// every i, given the run's sums `r`: exactly what [`IntStats::add`] in turn gives, without
    /// a pass over the run (but to find where a new minimum lies).
    #[inline(always)]
    pub fn add_sums(&mut self, r: &RunSums, x: &[i64], ticks: &[u64], first_index: u64) {
        debug_assert!(ticks.len() >= x.len());
        if r.n == 0 {
            return;
        }
        // Σ(x − o) and Σ(x − o)² from the sums about the run's minimum: c = lo − o
        let c = i128::from(r.lo) - i128::from(self.origin);
        let n = i128::from(r.n);
        self.sum += r.sum_e + n * c;
        self.sumsq += r.sum_ee + 2 * c * r.sum_e + n * c * c;
        self.n += r.n;
        // a strict comparison: the earliest minimum wins, as with add()
        if r.lo < self.min {
            let i = x.iter().position(|&v| v == r.lo).unwrap_or(0);
            self.min = r.lo;
            self.min_at = (ticks[i], first_index + i as u64);
        }
        self.max = self.max.max(r.hi);
    }

    /// Fold another block (same origin) into this one; the earliest minimum wins ties.
    pub fn merge(&mut self, o: &IntStats) {
        debug_assert_eq!(self.origin, o.origin);
        self.n += o.n;
        self.sum += o.sum;
        self.sumsq += o.sumsq;
        if o.min < self.min || (o.min == self.min && o.min_at.0 < self.min_at.0) {
            self.min = o.min;
            self.min_at = o.min_at;
        }
        self.max = self.max.max(o.max);
    }

    /// Mean (None when empty).
    pub fn mean(&self) -> Option<f64> {
        (self.n > 0).then(|| self.origin as f64 + self.sum as f64 / self.n as f64)
    }

    /// Sum of squared deviations from the mean, exactly.
    fn ss(&self) -> f64 {
        if self.n == 0 {
            return 0.0;
        }
        // n·Σd² − (Σd)² is exact in i128 for any realistic session
        let num = (self.n as i128).saturating_mul(self.sumsq) - self.sum.saturating_mul(self.sum);
        num.max(0) as f64 / self.n as f64
    }

    /// Population standard deviation (÷N).
    pub fn std_pop(&self) -> Option<f64> {
        (self.n > 0).then(|| (self.ss() / self.n as f64).sqrt())
    }

    /// Sample standard deviation (÷N−1).
    pub fn std_sample(&self) -> Option<f64> {
        (self.n > 1).then(|| (self.ss() / (self.n - 1) as f64).sqrt())
    }

    /// Root mean square of the samples themselves (origin 0 only).
    pub fn rms_about_zero(&self) -> Option<f64> {
        debug_assert_eq!(self.origin, 0);
        (self.n > 0).then(|| (self.sumsq as f64 / self.n as f64).sqrt())
    }
}

/// Deviations kept in the dense exact array: |x − reference| ≤ DENSE_HALF.
const DENSE_HALF: i64 = 2047;

/// A histogram of integer samples as deviations from a reference value: one exact bucket per
/// tick within ±2047 ticks of it (a dense array: recording costs one increment, which the
/// per-edge hot path needs), and hdrhistogram (3 significant digits) for outliers beyond.
#[derive(Clone, Debug)]
pub struct DevHistogram {
    /// The reference value.
    pub reference: i64,
    dense: Box<[u64]>,
    above: Histogram<u32>,
    below: Histogram<u32>,
}

impl PartialEq for DevHistogram {
    fn eq(&self, o: &Self) -> bool {
        self.reference == o.reference
            && self.dense == o.dense
            && self.above == o.above
            && self.below == o.below
    }
}

fn new_hist() -> Histogram<u32> {
    let mut h = Histogram::<u32>::new_with_bounds(1, 1 << 20, 3).expect("valid histogram bounds");
    h.auto(true);
    h
}

impl DevHistogram {
    /// Empty, around `reference`.
    pub fn new(reference: i64) -> DevHistogram {
        DevHistogram {
            reference,
            dense: vec![0u64; (2 * DENSE_HALF + 1) as usize].into_boxed_slice(),
            above: new_hist(),
            below: new_hist(),
        }
    }

    /// Record one sample.
    #[inline]
    pub fn record(&mut self, x: i64) {
        let d = x - self.reference;
        if (-DENSE_HALF..=DENSE_HALF).contains(&d) {
            self.dense[(d + DENSE_HALF) as usize] += 1;
        } else if d > 0 {
            let _ = self.above.record((d - DENSE_HALF) as u64);
        } else {
            let _ = self.below.record((-d - DENSE_HALF) as u64);
        }
    }

    /// Record every sample of `x`, whose run sums are `r`: the same as [`DevHistogram::record`]
    /// in turn. A run less than 128 ticks wide inside the dense range is counted in a local table
    /// with four interleaved lanes first, so that repeats of one value do not queue on one
    /// counter (one or two values: from the run's sums alone).
    #[inline(always)]
    pub fn record_run(&mut self, x: &[i64], r: &RunSums) {
        const W: usize = 128;
        let (lo, hi) = (r.lo, r.hi);
        if x.is_empty() {
            return;
        }
        let (Some(dlo), Some(dhi)) = (
            lo.checked_sub(self.reference),
            hi.checked_sub(self.reference),
        ) else {
            x.iter().for_each(|&v| self.record(v));
            return;
        };
        if dlo < -DENSE_HALF || dhi > DENSE_HALF || hi - lo >= W as i64 {
            x.iter().for_each(|&v| self.record(v));
            return;
        }
        let base = (dlo + DENSE_HALF) as usize;
        if hi - lo <= 1 {
            // one or two values: the sum about the minimum counts the upper one
            let upper = r.sum_e as u64;
            self.dense[base] += r.n - upper;
            if hi > lo {
                self.dense[base + 1] += upper;
            }
            return;
        }
        let mut lanes = [[0u32; W]; 4];
        let mut quads = x.chunks_exact(4);
        for q in &mut quads {
            for (lane, &v) in lanes.iter_mut().zip(q) {
                lane[(v - lo) as usize & (W - 1)] += 1;
            }
        }
        for &v in quads.remainder() {
            lanes[0][(v - lo) as usize & (W - 1)] += 1;
        }
        let width = (hi - lo) as usize + 1;
        for (b, slot) in self.dense[base..base + width].iter_mut().enumerate() {
            *slot += u64::from(lanes[0][b] + lanes[1][b] + lanes[2][b] + lanes[3][b]);
        }
    }

    /// [`RunSums::about`] of `x` (extremes `lo`, `hi`) and [`DevHistogram::record_run`] with
    /// them, in one pass when the run is 3 to 32 ticks wide: the sums then come from the counts.
    #[inline(always)]
    pub fn record_run_about(&mut self, x: &[i64], lo: i64, hi: i64) -> RunSums {
        debug_assert_eq!((lo, hi), extremes(x));
        let width = i128::from(hi) - i128::from(lo) + 1;
        let dense = (
            lo.checked_sub(self.reference),
            hi.checked_sub(self.reference),
        );
        let (Some(dlo), Some(dhi)) = dense else {
            return self.record_about(x, lo, hi);
        };
        if !(3..=8 * PACKED_WORDS as i128).contains(&width)
            || dlo < -DENSE_HALF
            || dhi > DENSE_HALF
            || x.len() >= 1 << 31
        {
            return self.record_about(x, lo, hi);
        }
        let mut counts = [0u64; 8 * PACKED_WORDS];
        for part in x.chunks(255) {
            match (width as usize).div_ceil(8) {
                1 => packed_counts::<1>(part, lo, &mut counts),
                2 => packed_counts::<2>(part, lo, &mut counts),
                3 => packed_counts::<3>(part, lo, &mut counts),
                _ => packed_counts::<4>(part, lo, &mut counts),
            }
        }
        let base = (dlo + DENSE_HALF) as usize;
        let (mut sum_e, mut sum_ee) = (0u64, 0u64);
        let used = &counts[..width as usize];
        for ((b, &c), slot) in used.iter().enumerate().zip(&mut self.dense[base..]) {
            *slot += c;
            // b below 32 and c at most 2^31: exact in u64
            sum_e += b as u64 * c;
            sum_ee += (b * b) as u64 * c;
        }
        RunSums {
            n: x.len() as u64,
            lo,
            hi,
            sum_e: i128::from(sum_e),
            sum_ee: i128::from(sum_ee),
        }
    }

    /// The sums, then the histogram from them (two passes).
    #[inline(always)]
    fn record_about(&mut self, x: &[i64], lo: i64, hi: i64) -> RunSums {
        let r = RunSums::about(x, lo, hi);
        self.record_run(x, &r);
        r
    }

    /// Samples recorded.
    fn len(&self) -> u64 {
        self.dense.iter().sum::<u64>() + self.above.len() + self.below.len()
    }

    /// Add another histogram with the same reference.
    pub fn merge(&mut self, o: &DevHistogram) {
        for (a, b) in self.dense.iter_mut().zip(o.dense.iter()) {
            *a += b;
        }
        let _ = self.above.add(&o.above);
        let _ = self.below.add(&o.below);
    }

    /// (value, count) of every non-empty bucket, ascending (outliers at their bucket's top).
    pub fn buckets(&self) -> Vec<(i64, u64)> {
        let mut out: Vec<(i64, u64)> = self
            .below
            .iter_recorded()
            .map(|v| {
                (
                    self.reference
                        - DENSE_HALF
                        - self.below.highest_equivalent(v.value_iterated_to()) as i64,
                    v.count_at_value() as u64,
                )
            })
            .collect();
        out.reverse();
        out.extend(
            self.dense
                .iter()
                .enumerate()
                .filter(|(_, c)| **c > 0)
                .map(|(i, c)| (self.reference - DENSE_HALF + i as i64, *c)),
        );
        out.extend(self.above.iter_recorded().map(|v| {
            (
                self.reference
                    + DENSE_HALF
                    + self.above.highest_equivalent(v.value_iterated_to()) as i64,
                v.count_at_value() as u64,
            )
        }));
        out
    }

    /// The value at quantile q (0…1): the smallest recorded value with at least q of the samples
    /// at or below it (bucket-equivalent beyond the dense range).
    pub fn quantile(&self, q: f64) -> Option<i64> {
        let n = self.len();
        if n == 0 {
            return None;
        }
        let mut rank = ((q.clamp(0.0, 1.0) * n as f64).ceil() as u64).clamp(1, n);
        let b = self.below.len();
        if rank <= b {
            // ascending values in `below` are descending deviations
            let d = value_at_rank(&self.below, b - rank + 1);
            return Some(self.reference - DENSE_HALF - d as i64);
        }
        rank -= b;
        for (i, &c) in self.dense.iter().enumerate() {
            if rank <= c {
                return Some(self.reference - DENSE_HALF + i as i64);
            }
            rank -= c;
        }
        let d = value_at_rank(&self.above, rank);
        Some(self.reference + DENSE_HALF + d as i64)
    }
}

/// Words of packed counters [`DevHistogram::record_run_about`] uses (runs up to 32 ticks wide).
const PACKED_WORDS: usize = 4;

/// Add to `counts[e]` how often each deviation e = x − lo occurs in `x` (at most 255 samples,
/// every e below 8·G): word g counts e = 8g … 8g + 7 in its eight bytes, so each sample costs a
/// shift and G masked adds, which vectorise, instead of an increment in memory.
#[inline(always)]
fn packed_counts<const G: usize>(x: &[i64], lo: i64, counts: &mut [u64; 8 * PACKED_WORDS]) {
    debug_assert!(x.len() <= 255 && G <= PACKED_WORDS);
    let mut words = [0u64; G];
    for &v in x {
        let e = v.wrapping_sub(lo) as u64;
        let one = 1u64 << ((e & 7) * 8);
        for (g, w) in words.iter_mut().enumerate() {
            // a byte holds at most 255: no carry into the next
            *w += if e >> 3 == g as u64 { one } else { 0 };
        }
    }
    for (g, w) in words.iter().enumerate() {
        for (b, c) in counts[8 * g..8 * g + 8].iter_mut().enumerate() {
            *c += (w >> (8 * b)) & 0xff;
        }
    }
}

/// The value with `rank` (1-based, ascending) in a histogram.
fn value_at_rank(h: &Histogram<u32>, rank: u64) -> u64 {
    let mut seen = 0u64;
    for v in h.iter_recorded() {
        seen += v.count_at_value() as u64;
        if seen >= rank {
            return h.highest_equivalent(v.value_iterated_to());
        }
    }
    h.max()
}

/// Wilson score interval for a binomial proportion at about 95 % (z = 1.96).
/// (E. B. Wilson, J. Am. Stat. Assoc. 22, 1927.)
pub fn wilson_95(successes: u64, trials: u64) -> Option<(f64, f64)> {
    if trials == 0 {
        return None;
    }
    let z = 1.959_963_984_540_054;
    let n = trials as f64;
    let p = successes as f64 / n;
    let z2 = z * z;
    let centre = (p + z2 / (2.0 * n)) / (1.0 + z2 / n);
    let half = z * ((p * (1.0 - p) / n) + z2 / (4.0 * n * n)).sqrt() / (1.0 + z2 / n);
    Some(((centre - half).max(0.0), (centre + half).min(1.0)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_statistics_of_the_reference_hand_example() {
        // REFERENCES.md §8 (computed hand example): periods 1000 1002 997 1002 999 ns →
        // period jitter RMS 1.897 (÷N) / 2.121 (÷N−1), pk-pk 5.
        let mut s = IntStats::new(1000);
        for (i, p) in [1000, 1002, 997, 1002, 999].into_iter().enumerate() {
            s.add(p, i as u64, i as u64);
        }
        assert!((s.std_pop().unwrap() - 1.897).abs() < 5e-4);
        assert!((s.std_sample().unwrap() - 2.121).abs() < 5e-4);
        assert_eq!(s.max - s.min, 5);
        assert_eq!(s.min_at.1, 2);
        assert!((s.mean().unwrap() - 1000.0).abs() < 1e-12);
    }

    #[test]
    fn merging_equals_one_pass() {
        let xs: Vec<i64> = (0..1000).map(|i| 500 + (i * 7919 % 97) - 48).collect();
        let mut one = IntStats::new(500);
        let mut a = IntStats::new(500);
        let mut b = IntStats::new(500);
        for (i, &x) in xs.iter().enumerate() {
            one.add(x, i as u64, i as u64);
            if i < 377 {
                a.add(x, i as u64, i as u64)
            } else {
                b.add(x, i as u64, i as u64)
            }
        }
        a.merge(&b);
        assert_eq!(a, one);
    }

    /// Runs through every branch of the run helpers (narrow and wide ranges, one or two
    /// values, inside and outside the dense histogram) give what one-at-a-time calls give.
    #[test]
    fn run_helpers_equal_one_sample_at_a_time() {
        let runs: [Vec<i64>; 11] = [
            vec![500; 9],
            (0..37).map(|i| 500 + i % 2).collect(),
            (0..20).map(|i| 499 + i % 3).collect(),
            (0..700).map(|i| 480 + (i * 11) % 32).collect(),
            (0..600).map(|i| 510 + (i * i) % 25).collect(),
            (0..41).map(|i| 495 + (i * 7) % 13).collect(),
            (0..50).map(|i| 400 + (i * 31) % 90).collect(),
            (0..70).map(|i| 440 + (i * 53) % 128).collect(),
            (0..60).map(|i| (i * 37) % 1000).collect(),
            (0..30)
                .map(|i| 500 + (i * 7919) % 300_000 - 150_000)
                .collect(),
            vec![500, -(1 << 40), 1 << 40, 500],
        ];
        for x in &runs {
            let ticks: Vec<u64> = (0..x.len() as u64).map(|i| 1000 + 3 * i).collect();
            let (mut one, mut bulk) = (IntStats::new(500), IntStats::new(500));
            let (mut h_one, mut h_bulk) = (DevHistogram::new(500), DevHistogram::new(500));
            for (i, &v) in x.iter().enumerate() {
                one.add(v, ticks[i], 7 + i as u64);
                h_one.record(v);
            }
            let (lo, hi) = extremes(x);
            let r = RunSums::about(x, lo, hi);
            bulk.add_sums(&r, x, &ticks, 7);
            h_bulk.record_run(x, &r);
            assert_eq!(one, bulk, "{x:?}");
            assert!(h_one == h_bulk, "{x:?}");
            // the one-pass variant: the same sums and counts
            let mut h_fused = DevHistogram::new(500);
            assert_eq!(h_fused.record_run_about(x, lo, hi), r, "{x:?}");
            assert!(h_one == h_fused, "{x:?}");
            assert_eq!(r.sum(), x.iter().map(|&v| i128::from(v)).sum::<i128>());
            let lo = *x.iter().min().unwrap();
            let ee: i128 = x
                .iter()
                .map(|&v| (i128::from(v) - i128::from(lo)).pow(2))
                .sum();
            assert_eq!((r.lo, r.sum_ee), (lo, ee), "{x:?}");
            // the weighted pass: the same sums, and Σk·(x_k − lo) for narrow runs
            assert_eq!(hi, *x.iter().max().unwrap(), "{x:?}");
            let (rw, sk) = RunSums::about_weighted(x, lo, hi, true);
            assert_eq!(rw, r, "{x:?}");
            let want: i128 = x
                .iter()
                .enumerate()
                .map(|(k, &v)| k as i128 * (i128::from(v) - i128::from(lo)))
                .sum();
            let narrow = i128::from(hi) - i128::from(lo) < 1 << 16;
            assert_eq!(sk.map(i128::from), narrow.then_some(want), "{x:?}");
        }
    }

    #[test]
    fn histogram_quantiles_match_sorted_values() {
        let xs: Vec<i64> = (0..10_001).map(|i| 62 + ((i * 31) % 9) - 4).collect();
        let mut h = DevHistogram::new(62);
        for &x in &xs {
            h.record(x);
        }
        let mut sorted = xs.clone();
        sorted.sort_unstable();
        for q in [0.0, 0.001, 0.01, 0.25, 0.5, 0.75, 0.99, 0.999, 1.0] {
            let rank = ((q * xs.len() as f64).ceil() as usize).clamp(1, xs.len());
            assert_eq!(h.quantile(q), Some(sorted[rank - 1]), "q {q}");
        }
    }

    #[test]
    fn wilson_interval_reference_values() {
        // Wilson (1927) interval, z = 1.96: 50 of 100 → 0.4038 … 0.5962 (common textbook value,
        // from memory); 0 of 10 → 0 … 0.2775.
        let (lo, hi) = wilson_95(50, 100).unwrap();
        assert!(
            (lo - 0.4038).abs() < 5e-4 && (hi - 0.5962).abs() < 5e-4,
            "{lo} {hi}"
        );
        let (lo, hi) = wilson_95(0, 10).unwrap();
        assert!(lo == 0.0 && (hi - 0.2775).abs() < 5e-4, "{hi}");
    }
}

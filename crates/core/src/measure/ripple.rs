//! The periodic part of one rail segment (ripple) and the rest (noise).
//!
//! A rail's ripple is seldom one sine: full-wave rectified mains leaves 100/120 Hz with its
//! harmonics, a switching regulator a sawtooth, often both at once. Per sag-free segment (its
//! mean removed), up to [`MAX_PARTS`] periodic parts are taken out one after the other:
//!
//! 1. **Find a period.** The periodogram (Schuster 1898) of what is left, zero-padded to a power
//!    of two (radix-2 FFT, Cooley & Tukey 1965); its largest ordinate at [`MIN_CYCLES`] or more
//!    cycles a segment is tested with Fisher's g test (Fisher 1929: P(g > x) ≈ m(1 − x)^(m−1)
//!    for m Fourier frequencies) at [`ALPHA`]; nothing significant, and the search stops. The
//!    frequency is refined to the periodogram's maximum (the maximum-likelihood estimate of a
//!    tone's frequency, Rife & Boorstyn 1974) by golden-section search within ±1 padded bin.
//! 2. **Its waveform.** Time-synchronous averaging (Braun 1975) over the whole cycles at that
//!    period, in one of two forms: a Fourier series of 1–8 harmonics (smooth ripple, e.g. a
//!    sine: few parameters, little noise) or the mean in 4–256 phase bins, each count at four
//!    shifts of a quarter bin (every harmonic, e.g. a sawtooth's drop). The form is chosen by two-fold cross-validation (Stone 1974): fitted
//!    on the even cycles it predicts the odd ones and the other way round; the smallest
//!    prediction error wins. The waveform fitted on all cycles is subtracted and the search goes
//!    on in what is left (a second tone, e.g. mains beside a regulator).
//!
//! Ripple pk-pk: the sum of the parts fitted on the even cycles peaks (and dips) at some
//! sample; that sample is read in the sum fitted on the odd cycles, and the other way round,
//! and the two readings are averaged. The halves' noise is independent, so noise does not
//! inflate it, and pure noise reads about zero. Ripple mean square: the mean of the product of
//! the two halves' sums (unbiased for the same reason). Noise: the residual's sum of squares
//! over n − 1 − (parameters fitted) degrees of freedom.
//!
//! Limits: a drop at a period that is not a whole number of samples is averaged over a bin
//! (pk-pk a few % low, noise a few % high); a corner hidden in noise is rounded off by the
//! Fourier form (pk-pk low); with few samples a period and harmonics folded back from above
//! half the sample rate the period is found less exactly (noise high).

/// Periodic parts taken out of one segment at most.
pub const MAX_PARTS: usize = 3;
/// A period counts when the segment holds at least this many cycles of it (slower changes are
/// wander, left in the noise).
pub const MIN_CYCLES: f64 = 4.0;
/// Significance of Fisher's g test for one periodogram peak.
pub const ALPHA: f64 = 1e-3;
/// Segments shorter than this (samples) are not searched: all of them is noise.
pub const MIN_SAMPLES: usize = 32;
/// Harmonic counts of the Fourier-series form.
const HARMONICS: [usize; 10] = [1, 2, 3, 4, 6, 8, 12, 16, 24, 32];
/// The highest of them.
const MAX_HARMONIC: usize = 32;
/// Rounds of backfitting when a segment holds several parts.
const BACKFIT_ROUNDS: usize = 2;
/// Harmonics the period's refinement sums at most.
const SUM_HARMONICS: usize = 16;
/// Samples per bin and half at least, on average, in the binned form.
const MIN_BIN_SAMPLES: usize = 2;
/// Shifts of the bins tried (each a 1/BIN_SHIFTS of a bin).
const BIN_SHIFTS: usize = 4;
/// Most phase bins of the binned form.
const MAX_BINS: usize = 256;

/// What one segment showed (raw ADC counts).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct SegmentFit {
    /// Samples.
    pub n: usize,
    /// Ripple pk-pk (counts; about zero, either sign, for a rail without ripple).
    pub ripple_pkpk: f64,
    /// Mean square of the periodic part (counts²; about zero, either sign, without ripple).
    pub ripple_ms: f64,
    /// Frequency of the first (strongest) periodic part, cycles per sample.
    pub cycles_per_sample: Option<f64>,
    /// Residual sum of squares (counts²).
    pub resid_ss: f64,
    /// Its degrees of freedom.
    pub resid_df: u64,
}

/// Working arrays, kept between segments.
#[derive(Clone, Debug, Default)]
pub struct Scratch {
    resid: Vec<f64>,
    sum_all: Vec<f64>,
    sum_even: Vec<f64>,
    sum_odd: Vec<f64>,
    parts: [[Vec<f64>; 3]; MAX_PARTS],
    re: Vec<f64>,
    im: Vec<f64>,
    bins: Vec<f64>,
}

/// Analyse one segment of raw samples.
pub fn analyse(seg: &[i64], s: &mut Scratch) -> SegmentFit {
    let n = seg.len();
    let mean = seg.iter().sum::<i64>() as f64 / n.max(1) as f64;
    s.resid.clear();
    s.resid.extend(seg.iter().map(|&v| v as f64 - mean));
    let mut fit = SegmentFit {
        n,
        ripple_pkpk: 0.0,
        ripple_ms: 0.0,
        cycles_per_sample: None,
        resid_ss: 0.0,
        resid_df: n.saturating_sub(1) as u64,
    };
    if n >= MIN_SAMPLES {
        for v in [&mut s.sum_all, &mut s.sum_even, &mut s.sum_odd] {
            v.clear();
            v.resize(n, 0.0);
        }
        // parts one after the other, then each fitted again beside the others (backfitting,
        // Hastie & Tibshirani 1990): a part fitted first absorbs a little of the next one
        let mut found: Vec<(f64, usize)> = Vec::new();
        while found.len() < MAX_PARTS {
            let Some(f) = strongest_period(&s.resid, &mut s.re, &mut s.im) else {
                break;
            };
            let j = found.len();
            let Some(p) = fold(&s.resid, f, &mut s.parts[j], &mut s.bins) else {
                break;
            };
            found.push((f, p));
            for i in 0..n {
                s.resid[i] -= s.parts[j][0][i];
            }
        }
        if found.len() > 1 {
            for _ in 0..BACKFIT_ROUNDS {
                for (j, (f, p)) in found.iter_mut().enumerate() {
                    for i in 0..n {
                        s.resid[i] += s.parts[j][0][i];
                    }
                    *p = fold(&s.resid, *f, &mut s.parts[j], &mut s.bins).unwrap_or(0);
                    for i in 0..n {
                        s.resid[i] -= s.parts[j][0][i];
                    }
                }
            }
        }
        fit.cycles_per_sample = found.first().map(|&(f, _)| f);
        for (j, _) in found.iter().enumerate() {
            for i in 0..n {
                s.sum_all[i] += s.parts[j][0][i];
                s.sum_even[i] += s.parts[j][1][i];
                s.sum_odd[i] += s.parts[j][2][i];
            }
        }
        let params: usize = found.iter().map(|&(_, p)| p).sum::<usize>().min(n - 2);
        if params > 0 {
            fit.resid_df = (n - 1 - params) as u64;
            fit.ripple_pkpk =
                0.5 * (cross_pkpk(&s.sum_even, &s.sum_odd) + cross_pkpk(&s.sum_odd, &s.sum_even));
            fit.ripple_ms = s
                .sum_even
                .iter()
                .zip(&s.sum_odd)
                .map(|(a, b)| a * b)
                .sum::<f64>()
                / n as f64;
        }
    }
    fit.resid_ss = s.resid.iter().map(|v| v * v).sum();
    fit
}

/// `read` at the samples where `pick` is highest and lowest: their difference.
fn cross_pkpk(pick: &[f64], read: &[f64]) -> f64 {
    let (mut hi, mut lo) = (0usize, 0usize);
    for (i, &v) in pick.iter().enumerate() {
        if v > pick[hi] {
            hi = i;
        }
        if v < pick[lo] {
            lo = i;
        }
    }
    read[hi] - read[lo]
}

/// The frequency (cycles per sample) of the periodogram's strongest significant peak, or None.
fn strongest_period(x: &[f64], re: &mut Vec<f64>, im: &mut Vec<f64>) -> Option<f64> {
    let n = x.len();
    let total: f64 = x.iter().map(|v| v * v).sum();
    if total <= 0.0 {
        return None;
    }
    let m = (2 * n).next_power_of_two();
    re.clear();
    re.extend_from_slice(x);
    re.resize(m, 0.0);
    im.clear();
    im.resize(m, 0.0);
    fft(re, im);
    let k_min = ((MIN_CYCLES * m as f64 / n as f64).ceil() as usize).max(1);
    let k_max = m / 2 - 1;
    if k_min > k_max {
        return None;
    }
    let (k, peak) = (k_min..=k_max)
        .map(|k| (k, re[k] * re[k] + im[k] * im[k]))
        .fold((0, -1.0), |b, c| if c.1 > b.1 { c } else { b });
    // Fisher's g: the peak's share of the half spectrum's power (Parseval: Σ over the n/2
    // Fourier frequencies of |X|² = n·Σx²/2)
    let g = (2.0 * peak / (n as f64 * total)).min(1.0);
    let mf = (n / 2) as f64;
    if g >= 1.0 || mf.ln() + (mf - 1.0) * (1.0 - g).ln() >= ALPHA.ln() {
        return None;
    }
    // the periodogram's peak (Rife & Boorstyn)…
    let bin = 1.0 / m as f64;
    let power = |f: f64| {
        let (s, c) = (-2.0 * std::f64::consts::PI * f).sin_cos();
        let (mut zr, mut zi, mut sr, mut si) = (1.0f64, 0.0f64, 0.0, 0.0);
        for (i, &v) in x.iter().enumerate() {
            sr += v * zr;
            si += v * zi;
            (zr, zi) = (zr * c - zi * s, zr * s + zi * c);
            if i % 1024 == 1023 {
                // keep the rotation on the unit circle
                let r = zr.hypot(zi);
                zr /= r;
                zi /= r;
            }
        }
        -(sr * sr + si * si)
    };
    let f = golden_min((k as f64 - 1.0) * bin, (k as f64 + 1.0) * bin, 16, power);
    // then the period whose harmonics together hold the most power (the approximate
    // non-linear least-squares pitch estimator, Christensen & Jakobsson 2009): with every
    // harmonic counted, a sawtooth's harmonics do not pull the period as they pull one peak
    let harmonic_sum = |f: f64| {
        let h = ((0.5 / f).ceil() as usize - 1).clamp(1, SUM_HARMONICS);
        let (s1, c1) = (-2.0 * std::f64::consts::PI * f).sin_cos();
        let mut acc = [(0.0f64, 0.0f64); SUM_HARMONICS];
        let (mut zr, mut zi) = (1.0f64, 0.0f64);
        for (i, &v) in x.iter().enumerate() {
            let (mut pr, mut pi) = (zr, zi);
            for a in acc.iter_mut().take(h) {
                a.0 += v * pr;
                a.1 += v * pi;
                (pr, pi) = (pr * zr - pi * zi, pr * zi + pi * zr);
            }
            (zr, zi) = (zr * c1 - zi * s1, zr * s1 + zi * c1);
            if i % 1024 == 1023 {
                let r = zr.hypot(zi);
                zr /= r;
                zi /= r;
            }
        }
        -acc.iter()
            .take(h)
            .map(|a| a.0 * a.0 + a.1 * a.1)
            .sum::<f64>()
    };
    let half_bin = 0.5 / n as f64;
    let f = golden_min(f - half_bin, f + half_bin, 16, harmonic_sum);
    (f * n as f64 >= MIN_CYCLES && f < 0.5).then_some(f)
}

/// The minimum of `g` on [a, b] by golden-section search (Kiefer 1953), `steps` narrowings.
fn golden_min(mut a: f64, mut b: f64, steps: usize, mut g: impl FnMut(f64) -> f64) -> f64 {
    let phi = (5.0f64.sqrt() - 1.0) / 2.0;
    let (mut c, mut d) = (b - phi * (b - a), a + phi * (b - a));
    let (mut gc, mut gd) = (g(c), g(d));
    for _ in 0..steps {
        if gc < gd {
            b = d;
            (d, gd) = (c, gc);
            c = b - phi * (b - a);
            gc = g(c);
        } else {
            a = c;
            (c, gc) = (d, gd);
            d = a + phi * (b - a);
            gd = g(d);
        }
    }
    0.5 * (a + b)
}

/// The waveform at `f` cycles per sample by time-synchronous averaging (module notes):
/// `part[0]`, `part[1]`, `part[2]` get the form fitted on all, the even and the odd whole
/// cycles, at every sample. Returns the parameters fitted, or None when the halves are empty.
fn fold(x: &[f64], f: f64, part: &mut [Vec<f64>; 3], bins: &mut Vec<f64>) -> Option<usize> {
    let n = x.len();
    let cycles = (n as f64 * f).floor();
    // samples of whole cycles only (the halves are then orthogonal to each harmonic)
    let used = ((cycles / f).ceil() as usize).min(n);
    let phase = |i: usize| {
        let t = i as f64 * f;
        (t - t.floor(), t.floor() as u64 % 2)
    };
    let period = 1.0 / f;
    let k_top = HARMONICS
        .iter()
        .copied()
        .filter(|&k| (k as f64) * f < 0.5)
        .max()
        .unwrap_or(0);
    let mut half_n = [0usize; 2];
    for i in 0..used {
        half_n[phase(i).1 as usize] += 1;
    }
    if half_n[0] == 0 || half_n[1] == 0 {
        return None;
    }

    // Fourier form: coefficient sums per half, then each half's prediction error of the other
    let mut coef = [[(0.0f64, 0.0f64); MAX_HARMONIC + 1]; 2];
    for (i, &v) in x.iter().enumerate().take(used) {
        let (ph, h) = phase(i);
        let (s1, c1) = (2.0 * std::f64::consts::PI * ph).sin_cos();
        let (mut zc, mut zs) = (c1, s1);
        for c in coef[h as usize][1..=k_top].iter_mut() {
            c.0 += v * zc;
            c.1 += v * zs;
            (zc, zs) = (zc * c1 - zs * s1, zs * c1 + zc * s1);
        }
    }
    for (h, c) in coef.iter_mut().enumerate() {
        for k in c.iter_mut() {
            k.0 *= 2.0 / half_n[h] as f64;
            k.1 *= 2.0 / half_n[h] as f64;
        }
    }
    let mut err_fourier = [0.0f64; MAX_HARMONIC + 1];
    if k_top > 0 {
        for (i, &v) in x.iter().enumerate().take(used) {
            let (ph, h) = phase(i);
            let other = &coef[1 - h as usize];
            let (s1, c1) = (2.0 * std::f64::consts::PI * ph).sin_cos();
            let (mut zc, mut zs) = (c1, s1);
            let mut model = 0.0;
            for k in 1..=k_top {
                model += other[k].0 * zc + other[k].1 * zs;
                let e = v - model;
                err_fourier[k] += e * e;
                (zc, zs) = (zc * c1 - zs * s1, zs * c1 + zc * s1);
            }
        }
    }

    // binned form: 4, 8, … bins and one a sample wide; narrower than a sample only when the
    // cycles' samples fall on many phases (a period that is not a whole number of samples),
    // which the prediction error tells: a bin one half never saw predicts nothing
    let mut ladder: Vec<usize> = Vec::new();
    let widest = (used / (2 * MIN_BIN_SAMPLES)).min(MAX_BINS);
    let mut b = 4;
    while b <= widest {
        ladder.push(b);
        b *= 2;
    }
    let one_a_sample = period.floor() as usize;
    if (4..=widest).contains(&one_a_sample) && !ladder.contains(&one_a_sample) {
        ladder.push(one_a_sample);
    }
    let mut best: (f64, Form) = (f64::INFINITY, Form::Fourier(0));
    for &k in HARMONICS.iter().filter(|&&k| k <= k_top) {
        if err_fourier[k] < best.0 {
            best = (err_fourier[k], Form::Fourier(k));
        }
    }
    // a series still gaining at its highest order has not converged (a drop, or harmonics
    // above half the sample rate folded back): cut off, it would ring at the drop (Gibbs) and
    // leave the rest as noise, so the bins decide
    let fourier = best;
    if best.1 == Form::Fourier(k_top) && !ladder.is_empty() {
        best = (f64::INFINITY, Form::Fourier(0));
    }
    // each bin count at four shifts of a quarter bin: a drop between two samples' phases
    // then lies within an eighth of a bin from a bin's edge
    let bin_of = |ph: f64, nb: usize, shift: usize| {
        ((ph * nb as f64 + shift as f64 / BIN_SHIFTS as f64) as usize) % nb
    };
    for &nb in &ladder {
        for shift in 0..BIN_SHIFTS {
            // sums and counts per half and bin: [sum0, cnt0, sum1, cnt1] per bin
            bins.clear();
            bins.resize(4 * nb, 0.0);
            for (i, &v) in x.iter().enumerate().take(used) {
                let (ph, h) = phase(i);
                let j = bin_of(ph, nb, shift);
                bins[4 * j + 2 * h as usize] += v;
                bins[4 * j + 2 * h as usize + 1] += 1.0;
            }
            let mut err = 0.0;
            for (i, &v) in x.iter().enumerate().take(used) {
                let (ph, h) = phase(i);
                let o = 4 * bin_of(ph, nb, shift) + 2 * (1 - h as usize);
                let model = if bins[o + 1] > 0.0 {
                    bins[o] / bins[o + 1]
                } else {
                    0.0
                };
                err += (v - model) * (v - model);
            }
            if err < best.0 {
                best = (err, Form::Bins(nb, shift));
            }
        }
    }
    if best.1 == Form::Fourier(0) {
        best = fourier;
    }

    for p in part.iter_mut() {
        p.clear();
        p.resize(n, 0.0);
    }
    match best.1 {
        Form::Fourier(0) => None,
        Form::Fourier(k) => {
            let all: Vec<(f64, f64)> = (0..=k)
                .map(|j| {
                    let w0 = half_n[0] as f64 / used as f64;
                    (
                        w0 * coef[0][j].0 + (1.0 - w0) * coef[1][j].0,
                        w0 * coef[0][j].1 + (1.0 - w0) * coef[1][j].1,
                    )
                })
                .collect();
            let [p_all, p_even, p_odd] = part;
            for (i, ((pa, pe), po)) in p_all
                .iter_mut()
                .zip(p_even.iter_mut())
                .zip(p_odd.iter_mut())
                .enumerate()
            {
                let (ph, _) = phase(i);
                let (s1, c1) = (2.0 * std::f64::consts::PI * ph).sin_cos();
                let (mut zc, mut zs) = (c1, s1);
                for j in 1..=k {
                    *pa += all[j].0 * zc + all[j].1 * zs;
                    *pe += coef[0][j].0 * zc + coef[0][j].1 * zs;
                    *po += coef[1][j].0 * zc + coef[1][j].1 * zs;
                    (zc, zs) = (zc * c1 - zs * s1, zs * c1 + zc * s1);
                }
            }
            Some(2 * k)
        }
        Form::Bins(nb, shift) => {
            bins.clear();
            bins.resize(4 * nb, 0.0);
            for (i, &v) in x.iter().enumerate().take(used) {
                let (ph, h) = phase(i);
                let j = bin_of(ph, nb, shift);
                bins[4 * j + 2 * h as usize] += v;
                bins[4 * j + 2 * h as usize + 1] += 1.0;
            }
            let [p_all, p_even, p_odd] = part;
            for (i, ((pa, pe), po)) in p_all
                .iter_mut()
                .zip(p_even.iter_mut())
                .zip(p_odd.iter_mut())
                .enumerate()
            {
                let (ph, _) = phase(i);
                let j = bin_of(ph, nb, shift);
                let b = &bins[4 * j..4 * j + 4];
                let cnt = b[1] + b[3];
                let all = if cnt > 0.0 { (b[0] + b[2]) / cnt } else { 0.0 };
                *pa = all;
                // a bin one half never saw takes the mean of all cycles
                *pe = if b[1] > 0.0 { b[0] / b[1] } else { all };
                *po = if b[3] > 0.0 { b[2] / b[3] } else { all };
            }
            Some(nb)
        }
    }
}

/// A periodic part's form.
#[derive(Clone, Copy, Debug, PartialEq)]
enum Form {
    /// A Fourier series of this many harmonics.
    Fourier(usize),
    /// Means in this many phase bins, shifted by this many quarters of a bin.
    Bins(usize, usize),
}

/// In-place radix-2 FFT (Cooley & Tukey 1965), X_k = Σ x_j e^(−2πi jk/n); n a power of two.
fn fft(re: &mut [f64], im: &mut [f64]) {
    let n = re.len();
    debug_assert!(n.is_power_of_two() && im.len() == n);
    let mut j = 0usize;
    for i in 1..n {
        let mut bit = n >> 1;
        while j & bit != 0 {
            j ^= bit;
            bit >>= 1;
        }
        j |= bit;
        if i < j {
            re.swap(i, j);
            im.swap(i, j);
        }
    }
    // the twiddles e^(−2πi k/n) once; a stage of length len takes every (n/len)-th
    let twiddles: Vec<(f64, f64)> = (0..n / 2)
        .map(|k| (-2.0 * std::f64::consts::PI * k as f64 / n as f64).sin_cos())
        .collect();
    let mut len = 2;
    while len <= n {
        let half = len / 2;
        let stride = n / len;
        for start in (0..n).step_by(len) {
            for k in 0..half {
                let (ws, wc) = twiddles[k * stride];
                let (a, b) = (start + k, start + k + half);
                let tr = re[b] * wc - im[b] * ws;
                let ti = re[b] * ws + im[b] * wc;
                re[b] = re[a] - tr;
                im[b] = im[a] - ti;
                re[a] += tr;
                im[a] += ti;
            }
        }
        len <<= 1;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rand::SeedableRng;
    use rand_xoshiro::Xoshiro256PlusPlus;

    #[test]
    fn fft_matches_the_dft_definition() {
        // the DFT's definition, X_k = Σ x_j e^(−2πi jk/n), summed directly
        let x: Vec<f64> = (0..64).map(|i| ((i * 37 + 11) % 17) as f64 - 8.0).collect();
        let (mut re, mut im) = (x.clone(), vec![0.0; 64]);
        fft(&mut re, &mut im);
        for k in 0..64 {
            let (mut sr, mut si) = (0.0, 0.0);
            for (j, &v) in x.iter().enumerate() {
                let a = -2.0 * std::f64::consts::PI * (j * k) as f64 / 64.0;
                sr += v * a.cos();
                si += v * a.sin();
            }
            assert!(
                (re[k] - sr).abs() < 1e-9 && (im[k] - si).abs() < 1e-9,
                "bin {k}"
            );
        }
    }

    fn noisy(n: usize, seed: u64, sd: f64, wave: impl Fn(usize) -> f64) -> Vec<i64> {
        use rand::Rng;
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(seed);
        (0..n)
            .map(|i| {
                // Box–Muller normal deviate
                let (u1, u2): (f64, f64) = (rng.random::<f64>().max(1e-300), rng.random());
                let g = (-2.0 * u1.ln()).sqrt() * (2.0 * std::f64::consts::PI * u2).cos();
                (1000.0 + wave(i) + sd * g).round() as i64
            })
            .collect()
    }

    fn mean_fit(segments: usize, sd: f64, wave: impl Fn(usize) -> f64) -> (f64, f64, f64) {
        let mut s = Scratch::default();
        let (mut pk, mut ms, mut ss, mut df) = (0.0, 0.0, 0.0, 0u64);
        for seed in 0..segments as u64 {
            let off = seed as usize * 1000;
            let r = analyse(&noisy(1000, seed, sd, |i| wave(i + off)), &mut s);
            pk += r.ripple_pkpk;
            ms += r.ripple_ms;
            ss += r.resid_ss;
            df += r.resid_df;
        }
        (
            pk / segments as f64,
            (ms / segments as f64).sqrt(),
            (ss / df as f64).sqrt(),
        )
    }

    #[test]
    fn a_sawtooth_keeps_its_pkpk_and_rms() {
        // sawtooth of amplitude A: pk-pk 2A, RMS A/√3 (closed form); sampled 100 times a
        // period the samples span 2A·99/100. Rounding to counts adds 1/12 count² of noise
        // (Widrow's uniform model of quantisation) beside the Gaussian noise.
        let a = 10.0;
        let (pk, rms, noise) = mean_fit(10, 1.0, |i| {
            let x = (i as f64 / 100.0).fract();
            a * (2.0 * x - 1.0)
        });
        let want_pk = 2.0 * a * 0.99;
        assert!((pk - want_pk).abs() < 0.03 * want_pk, "pk-pk {pk}");
        assert!(
            (rms - a / 3f64.sqrt()).abs() < 0.03 * a / 3f64.sqrt(),
            "RMS {rms}"
        );
        let want = (1.0f64 + 1.0 / 12.0).sqrt();
        assert!(
            (noise - want).abs() < 0.05 * want,
            "noise {noise} vs {want}"
        );
    }

    #[test]
    fn a_triangle_and_a_sine_keep_theirs() {
        // triangle of amplitude A: RMS A/√3; sine: RMS A/√2 (closed forms)
        let a = 8.0;
        let triangle = |i: usize| {
            let x = (i as f64 / 83.3).fract();
            a * (1.0 - 4.0 * (x - 0.5).abs())
        };
        let (pk, rms, _) = mean_fit(10, 0.5, triangle);
        assert!((pk - 2.0 * a).abs() < 0.04 * 2.0 * a, "triangle pk-pk {pk}");
        assert!(
            (rms - a / 3f64.sqrt()).abs() < 0.03 * a / 3f64.sqrt(),
            "RMS {rms}"
        );
        // in noise that hides its higher harmonics the corners are rounded off (the form that
        // predicts best is a short Fourier series): pk-pk reads low, RMS and noise stay right
        let (pk, rms, noise) = mean_fit(10, 2.0, triangle);
        assert!(
            pk < 2.0 * a && pk > 0.85 * 2.0 * a,
            "triangle pk-pk {pk} in noise"
        );
        assert!(
            (rms - a / 3f64.sqrt()).abs() < 0.03 * a / 3f64.sqrt(),
            "RMS {rms}"
        );
        let want = (4.0f64 + 1.0 / 12.0).sqrt();
        assert!(
            (noise - want).abs() < 0.05 * want,
            "noise {noise} vs {want}"
        );
        let (pk, rms, noise) = mean_fit(10, 2.5, |i| {
            a * (2.0 * std::f64::consts::PI * i as f64 / 100.0).sin()
        });
        assert!((pk - 2.0 * a).abs() < 0.03 * 2.0 * a, "sine pk-pk {pk}");
        assert!(
            (rms - a / 2f64.sqrt()).abs() < 0.03 * a / 2f64.sqrt(),
            "RMS {rms}"
        );
        let want = (6.25f64 + 1.0 / 12.0).sqrt();
        assert!(
            (noise - want).abs() < 0.05 * want,
            "noise {noise} vs {want}"
        );
    }

    #[test]
    fn two_unrelated_parts_are_both_found() {
        // a sawtooth at 1/37 cycles a sample beside a sine at 1/100: the sum's pk-pk over the
        // segment, computed from the waveform itself, and RMS √(A₁²/3 + A₂²/2) (the parts are
        // uncorrelated over whole cycles)
        let (a1, a2) = (6.0, 4.0);
        let wave = |i: usize| {
            let x = (i as f64 / 37.0).fract();
            a1 * (2.0 * x - 1.0) + a2 * (2.0 * std::f64::consts::PI * i as f64 / 100.0).sin()
        };
        let mut want_pk = 0.0;
        for seg in 0..10 {
            let v: Vec<f64> = (seg * 1000..seg * 1000 + 1000).map(wave).collect();
            let (lo, hi) = v
                .iter()
                .fold((f64::MAX, f64::MIN), |(l, h), &x| (l.min(x), h.max(x)));
            want_pk += (hi - lo) / 10.0;
        }
        let (pk, rms, noise) = mean_fit(10, 1.0, wave);
        assert!(
            (pk - want_pk).abs() < 0.04 * want_pk,
            "pk-pk {pk} vs {want_pk}"
        );
        let want_rms = (a1 * a1 / 3.0 + a2 * a2 / 2.0).sqrt();
        assert!(
            (rms - want_rms).abs() < 0.03 * want_rms,
            "RMS {rms} vs {want_rms}"
        );
        let want = (1.0f64 + 1.0 / 12.0).sqrt();
        assert!(
            (noise - want).abs() < 0.05 * want,
            "noise {noise} vs {want}"
        );
    }

    #[test]
    fn noise_alone_is_noise() {
        let (pk, _, noise) = mean_fit(20, 3.0, |_| 0.0);
        assert!(pk.abs() < 0.5, "ripple {pk} from noise alone");
        let want = (9.0f64 + 1.0 / 12.0).sqrt();
        assert!(
            (noise - want).abs() < 0.03 * want,
            "noise {noise} vs {want}"
        );
    }
}

//! Detrended TIE records: a record of consecutive committed rises is taken against its own
//! least-squares line (an ideal clock fitted to it), giving its residuals' peak to peak and sum
//! of squares. Both clock paths close their records here.

use super::super::stats::{extremes, narrow_sums};

/// Close a full record: its figures, and the record itself handed to `out` when an observer
/// keeps records (then emptied either way). `w` is a reused working buffer.
#[inline(always)]
pub(super) fn close_record(
    record: &mut Vec<u64>,
    w: &mut Vec<i64>,
    out: &mut Option<Vec<Vec<u64>>>,
) -> (f64, f64, u64) {
    let r = tie_record_pkpk(record, w);
    if let Some(done) = out {
        done.push(record.clone());
    }
    record.clear();
    r
}

/// Peak-to-peak and sum of squares of residuals of edge times against their own least-squares
/// line (a detrended TIE record), in ticks. A record spanning less than 2^26 ticks takes two
/// passes: exact integer sums of the offsets from its first edge (the sum of squared residuals
/// follows exactly from them), then the extremes in floating point. Otherwise the chord through
/// the record's ends is taken out in integers first (residuals do not change when a line is
/// removed), leaving small numbers in `w` (a reused buffer).
#[inline(always)]
fn tie_record_pkpk(t: &[u64], w: &mut Vec<i64>) -> (f64, f64, u64) {
    let n = t.len();
    if n < 3 {
        // a line passes through one or two points exactly
        return (0.0, 0.0, n as u64);
    }
    if let Some(r) = tie_record_short(t) {
        return r;
    }
    let t0 = t[0];
    let step = t[n - 1].wrapping_sub(t0) / (n as u64 - 1);
    w.clear();
    let mut at = t0;
    w.extend(t.iter().map(|&x| {
        let v = x.wrapping_sub(at) as i64;
        at = at.wrapping_add(step);
        v
    }));
    let (wlo, whi) = extremes(w);
    let nf = n as f64;
    // deviations below 2^20 over at most 2^16 stamps: exact sums in u64 (which vectorise;
    // floating-point sums cannot be reordered), centred exactly in i128, and 32-bit values
    // for the floating-point pass
    if i128::from(whi) - i128::from(wlo) < 1 << 20 && n <= 1 << 16 {
        let (se, see, ske) = narrow_sums::<true>(w, wlo);
        let n128 = n as i128;
        let sk = n128 * (n128 - 1) / 2;
        let sxx = n128 * n128 * (n128 * n128 - 1) / 12;
        let sxy = n128 * i128::from(ske) - sk * i128::from(se);
        let syy = n128 * i128::from(see) - i128::from(se) * i128::from(se);
        let b = sxy as f64 / sxx as f64;
        let pkpk = residual_pkpk(w, b, |v| f64::from(v.wrapping_sub(wlo) as i32));
        return (
            pkpk,
            ((syy as f64 - sxy as f64 * b) / nf).max(0.0),
            n as u64,
        );
    }
    let (mut sw, mut skw, mut sww) = (0.0f64, 0.0f64, 0.0f64);
    for (k, &v) in w.iter().enumerate() {
        let v = v as f64;
        sw += v;
        skw += k as f64 * v;
        sww += v * v;
    }
    let sk = nf * (nf - 1.0) / 2.0;
    let sxx = nf * (nf * nf - 1.0) / 12.0;
    let sxy = skw - sk * sw / nf;
    let b = sxy / sxx;
    let pkpk = residual_pkpk(w, b, |v| v as f64);
    (pkpk, (sww - sw * sw / nf - sxy * b).max(0.0), n as u64)
}

/// Peak to peak of the residuals value(x_k) − b·k over a record: b is finite, so no NaN can
/// occur and plain compares in four lanes give the extremes (k counts in f64, exactly).
#[inline(always)]
fn residual_pkpk<T: Copy>(x: &[T], b: f64, value: impl Fn(T) -> f64) -> f64 {
    let (mut lo4, mut hi4) = ([f64::INFINITY; 4], [f64::NEG_INFINITY; 4]);
    let mut kf = [0.0, 1.0, 2.0, 3.0];
    let mut quads = x.chunks_exact(4);
    for q in &mut quads {
        for (j, &v) in q.iter().enumerate() {
            let r = value(v) - b * kf[j];
            lo4[j] = if r < lo4[j] { r } else { lo4[j] };
            hi4[j] = if r > hi4[j] { r } else { hi4[j] };
            kf[j] += 4.0;
        }
    }
    let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
    for (j, &v) in quads.remainder().iter().enumerate() {
        let r = value(v) - b * kf[j];
        lo = lo.min(r);
        hi = hi.max(r);
    }
    for j in 0..4 {
        lo = lo.min(lo4[j]);
        hi = hi.max(hi4[j]);
    }
    hi - lo
}

/// [`tie_record_pkpk`] for a record of 3…4095 edges within 2^26 ticks of its first (None
/// otherwise): offsets y below 2^26 over k < 2^12 keep Σy, Σk·y and Σy² exact in u64.
#[inline(always)]
fn tie_record_short(t: &[u64]) -> Option<(f64, f64, u64)> {
    let n = t.len();
    if !(3..1 << 12).contains(&n) {
        return None;
    }
    let t0 = t[0];
    // wrapping sums, trusted only when every offset is below 2^26 (their OR is)
    let (mut or, mut se, mut ske, mut see) = (0u64, 0u64, 0u64, 0u64);
    for (k, &x) in t.iter().enumerate() {
        let y = x.wrapping_sub(t0);
        or |= y;
        let y32 = u64::from(y as u32);
        se = se.wrapping_add(y32);
        ske = ske.wrapping_add(u64::from(k as u32) * y32);
        see = see.wrapping_add(y32 * y32);
    }
    if or >= 1 << 26 {
        return None;
    }
    // n·(centred sums): sxx = n·Σ(k − k̄)², sxy = n·Σ(k − k̄)(y − ȳ), syy = n·Σ(y − ȳ)²
    let n128 = n as i128;
    let sk = n128 * (n128 - 1) / 2;
    let sxx = n128 * n128 * (n128 * n128 - 1) / 12;
    let sxy = n128 * i128::from(ske) - sk * i128::from(se);
    let syy = n128 * i128::from(see) - i128::from(se) * i128::from(se);
    // the residual sum of squares, (syy·sxx − sxy²) / (n·sxx), with an exact numerator
    // (below 2^125 for these bounds)
    let ss = (syy * sxx - sxy * sxy).max(0) as f64 / (n128 * sxx) as f64;
    let b = sxy as f64 / sxx as f64;
    // y as f64 exactly: below 2^52, its bits under the exponent of 2^52, less 2^52 (no
    // 64-bit integer conversion in these vector units)
    const TWO_52: u64 = 0x4330_0000_0000_0000;
    let as_f64 = |y: u64| f64::from_bits(y | TWO_52) - f64::from_bits(TWO_52);
    let pkpk = residual_pkpk(t, b, |x| as_f64(x.wrapping_sub(t0)));
    Some((pkpk, ss, n as u64))
}

/// Residuals (in ticks) of edge times against their own least-squares line: the TIE of a
/// record against an ideal clock fitted to it.
pub fn detrended(t: &[u64]) -> Vec<f64> {
    let Some(&first) = t.first() else {
        return Vec::new();
    };
    let n = t.len() as f64;
    let t0 = first as f64;
    let (mut sk, mut skk, mut su, mut sku) = (0.0, 0.0, 0.0, 0.0);
    for (k, &ti) in t.iter().enumerate() {
        let (k, u) = (k as f64, ti as f64 - t0);
        sk += k;
        skk += k * k;
        su += u;
        sku += k * u;
    }
    let den = n * skk - sk * sk;
    let b = if den != 0.0 {
        (n * sku - sk * su) / den
    } else {
        0.0
    };
    let a = (su - b * sk) / n;
    t.iter()
        .enumerate()
        .map(|(k, &ti)| ti as f64 - t0 - a - b * k as f64)
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The closed-form record figures equal the residuals computed one by one (against
    /// `detrended`, the plain two-pass least squares).
    #[test]
    fn tie_record_figures_match_plain_least_squares() {
        let mut x: u64 = 0x2545_F491_4F6C_DD1D;
        // short records (two-pass sums), ones too long or too wide for them (integer sums after
        // the chord is taken out), and one whose residuals are too wide for those (floating
        // point): (edges, step, spread of a step, short)
        for (n, step, wobble, short) in [
            (3usize, 1000, 7, true),
            (7, 1000, 7, true),
            (10, 1000, 7, true),
            (1024, 1000, 7, true),
            (1024, 1 << 17, 7, false),
            (5000, 1000, 7, false),
            (1024, 1 << 30, 1 << 24, false),
        ] {
            let mut t = 1u64 << 41;
            let ticks: Vec<u64> = (0..n)
                .map(|_| {
                    x ^= x << 13;
                    x ^= x >> 7;
                    x ^= x << 17;
                    t += step + x % wobble;
                    t
                })
                .collect();
            assert_eq!(tie_record_short(&ticks).is_some(), short, "{n} × {step}");
            let r = detrended(&ticks);
            let lo = r.iter().copied().fold(f64::INFINITY, f64::min);
            let hi = r.iter().copied().fold(f64::NEG_INFINITY, f64::max);
            let ss: f64 = r.iter().map(|v| v * v).sum();
            let (pkpk, ss2, cnt) = tie_record_pkpk(&ticks, &mut Vec::new());
            assert_eq!(cnt, n as u64);
            // to a millionth of a tick, or a part in 10^9 of a wide record
            assert!(
                (pkpk - (hi - lo)).abs() < 1e-6 * (1e-3 * (hi - lo)).max(1.0),
                "{n}: {pkpk} vs {}",
                hi - lo
            );
            assert!((ss2 - ss).abs() < 1e-6 * ss.max(1.0), "{n}: {ss2} vs {ss}");
        }
    }
}

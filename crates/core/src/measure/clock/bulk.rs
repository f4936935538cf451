//! The bulk path of the clock statistics. A clean stretch of edges (no glitch, stall, long gap,
//! polarity break or time reversal; no threshold refresh or short-run boundary inside it) is
//! taken as arrays in a few tight passes instead of edge by edge. A stretch is first assumed
//! clean up to the next refresh and checked from its gap arrays' extremes; only when that fails
//! is it scanned edge by edge for its clean prefix. It yields exactly what the per-edge path
//! yields (tested against it below, `bulk_equals_per_edge`), several times faster.

use super::super::stats::RunSums;
use super::acc::{FIT_LIM, seg_add};
use super::config::{BATCH, MAX_GAP_TICKS, REFRESH};
use super::state::ClockState;
use super::tie::close_record;

/// The bounds of a bulk step from the steady state (see [`ClockState::steady`]).
struct Steady {
    /// The pending edge's tick.
    pt: u64,
    /// Shortest gap closing a low pulse (at a rise).
    gl: u64,
    /// Shortest gap closing a high pulse (at a fall).
    gh: u64,
    /// Longest gap (a stall beyond).
    hi: u64,
    /// Shortest spacing of two falls, of two rises.
    gp: [u64; 2],
    /// Rises the stretch may commit before the refresh segment ends.
    max_rises: usize,
    /// Last tick a committed rise may have (the short run's end).
    run_limit: u64,
    /// Most edges in one step.
    n_max: usize,
}

impl Steady {
    /// The edges a clean stretch would take when no gap or run boundary stops it first: up to
    /// and including the fall that completes the refresh segment (each fall commits the rise
    /// before it; the m-th fall is edge 2m − 1 when the first edge rises, else 2m − 2).
    fn limit(&self, rising: bool) -> usize {
        let last_fall = (2 * self.max_rises).saturating_sub(if rising { 1 } else { 2 });
        self.n_max.min(last_fall + 1)
    }

    /// Whether a stretch whose committed gaps have these extremes, whose committed rises and
    /// falls lie at least these spacings apart, the last edge this gap, spacing and polarity,
    /// and the latest committed rise this tick, is clean (what the scan in `clean_len` finds
    /// edge by edge).
    fn clean(
        &self,
        gaps: [(i64, i64); 2],
        spacings: [i64; 2],
        last: (u64, u64, bool),
        rise: u64,
    ) -> bool {
        let [low, high] = gaps;
        let [rise_spacing, fall_spacing] = spacings;
        let within = |(lo, hi): (i64, i64), least: u64| {
            i128::from(lo) >= i128::from(least) && i128::from(hi) <= i128::from(self.hi)
        };
        let (gap, spacing, is_rise) = last;
        let least = if is_rise { self.gl } else { self.gh };
        within(low, self.gl)
            && within(high, self.gh)
            && i128::from(rise_spacing) >= i128::from(self.gp[1])
            && i128::from(fall_spacing) >= i128::from(self.gp[0])
            && spacing >= self.gp[usize::from(is_rise)]
            && (least..=self.hi).contains(&gap)
            && rise <= self.run_limit
    }
}

/// `out[k] = a[k] − b[k]` (a later tick less an earlier one) for every k of `out`, and the
/// extremes of what was written (taken in the same pass).
#[inline(always)]
fn diff_extremes(out: &mut [i64], a: &[u64], b: &[u64]) -> (i64, i64) {
    debug_assert!(a.len() >= out.len() && b.len() >= out.len());
    let (mut lo, mut hi) = (i64::MAX, i64::MIN);
    for ((o, &x), &y) in out.iter_mut().zip(a).zip(b) {
        // wrapping: a stretch not yet checked may run backwards (then the gap is refused)
        *o = x.wrapping_sub(y) as i64;
        lo = lo.min(*o);
        hi = hi.max(*o);
    }
    (lo, hi)
}

impl ClockState {
    /// Edges in order, the first rising when `first_rising` (polarities alternate): the same as
    /// [`ClockState::edge`] for each in turn, with clean stretches taken in bulk.
    pub fn edges(&mut self, ticks: &[u64], first_rising: bool) {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // SAFETY: the processor has AVX2, checked just above (the answer is cached).
            unsafe { self.edges_avx2(ticks, first_rising) };
            return;
        }
        self.edges_here(ticks, first_rising);
    }

    /// [`ClockState::edges`] compiled for AVX2: the bulk passes work on four 64-bit lanes
    /// (baseline x86-64 has no 64-bit compare, so min/max passes would run one value at a time).
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    fn edges_avx2(&mut self, ticks: &[u64], first_rising: bool) {
        self.edges_here(ticks, first_rising);
    }

    /// The loop itself, inlined into each compiled variant; returns how many bulk steps it took,
    /// and how many of them were taken without the edge-by-edge scan.
    #[inline(always)]
    pub(super) fn edges_here(&mut self, ticks: &[u64], first_rising: bool) -> (usize, usize) {
        let (mut i, mut steps, mut unscanned) = (0, 0, 0);
        let mut rising = first_rising;
        while i < ticks.len() {
            // first the longest stretch the steady state allows, its gaps checked after the
            // arrays are made (a stretch is almost always clean); if that fails, the scan
            let n = match self.steady(ticks.len() - i, rising) {
                Some(st) => {
                    let n = st.limit(rising);
                    if n >= 2 && self.bulk(&ticks[i..i + n], rising, Some(&st)) {
                        steps += 1;
                        unscanned += 1;
                        i += n;
                        rising ^= n % 2 == 1;
                        continue;
                    }
                    // nothing changed: the bounds still hold
                    self.clean_len(&ticks[i..], rising, &st)
                }
                None => 0,
            };
            if n >= 2 {
                if self.bulk(&ticks[i..i + n], rising, None) {
                    steps += 1;
                } else {
                    for (k, &t) in ticks[i..i + n].iter().enumerate() {
                        self.edge(t, rising ^ (k % 2 == 1));
                    }
                }
                i += n;
                rising ^= n % 2 == 1;
            } else {
                self.edge(ticks[i], rising);
                rising = !rising;
                i += 1;
            }
        }
        (steps, unscanned)
    }

    /// The bounds a bulk step from this state works within (for a batch of `len` edges, the
    /// first rising when `rising`); None unless the channel is in its steady state.
    #[inline(always)]
    fn steady(&self, len: usize, rising: bool) -> Option<Steady> {
        let (Some((pt, pr)), Some(lr), Some(lf), Some(le)) =
            (self.pending, self.last_rise, self.last_fall, self.last_edge)
        else {
            return None;
        };
        if pr == rising
            || self.suspect.is_some()
            || self.stall_ticks == u64::MAX
            || self.prev_period.is_none()
            || self.fit_origin.is_none()
            || self.allan.is_none()
            || self.acc.is_none()
            || self.run.n == 0
            || self.rises.is_empty()
            || self.refresh >= self.segment
            || self.anchor.map(|a| a.0) != Some(lr)
        {
            return None;
        }
        // the committed edges alternate: the newest has the pending edge's other polarity
        let (newer, older) = if pr { (lf, lr) } else { (lr, lf) };
        let hi = self.stall_ticks.min(MAX_GAP_TICKS);
        let (gh, gl) = (self.glitch_high_ticks.max(1), self.glitch_low_ticks.max(1));
        if le != newer || older >= newer || pt <= le || pt - le > hi || hi < gh.max(gl) {
            return None;
        }
        Some(Steady {
            pt,
            gl,
            gh,
            hi,
            gp: self.spacing_ticks,
            max_rises: (self.segment - self.refresh) as usize,
            run_limit: self.run.start.saturating_add(self.run_ticks),
            n_max: len.min(2 * REFRESH as usize),
        })
    }

    /// How many of the edges `t` (the first rising when `rising`) the bulk path may take from
    /// the steady state whose bounds are `st` (made for these edges): the clean prefix, found
    /// edge by edge.
    #[inline(always)]
    fn clean_len(&self, t: &[u64], rising: bool, st: &Steady) -> usize {
        let &Steady {
            pt,
            gl,
            gh,
            hi,
            gp,
            max_rises,
            run_limit,
            n_max,
        } = st;
        // le: the committed edge before the pending one (the same polarity as t[0])
        let Some(le) = self.last_edge else {
            return 0;
        };
        // a gap is fine when not shorter than the glitch threshold of the pulse it closes (a
        // rise closes a low pulse) and not longer than a stall: one unsigned compare, which
        // also refuses time running backwards (the difference wraps around)
        let (lo_even, lo_odd) = if rising { (gl, gh) } else { (gh, gl) };
        let bad = |gap: u64, lo: u64| gap.wrapping_sub(lo) > hi - lo;
        // the spacing of two edges of one polarity (two gaps, each checked above), against
        // the threshold of that polarity
        let (gp_even, gp_odd) = if rising {
            (gp[1], gp[0])
        } else {
            (gp[0], gp[1])
        };
        let near = |spacing: u64, least: u64| spacing < least;
        let (mut j, mut prev2, mut prev, mut rises) = (0usize, le, pt, 0usize);
        // blocks of 8 cycles, checked without branches
        while j + 16 <= n_max && rises + 8 < max_rises {
            let b = &t[j..j + 16];
            let mut any = bad(b[0].wrapping_sub(prev), lo_even);
            any |= near(b[0].wrapping_sub(prev2), gp_even) | near(b[1].wrapping_sub(prev), gp_odd);
            for k in 1..16 {
                any |= bad(b[k].wrapping_sub(b[k - 1]), [lo_even, lo_odd][k % 2]);
            }
            for k in 2..16 {
                any |= near(b[k].wrapping_sub(b[k - 2]), [gp_even, gp_odd][k % 2]);
            }
            // the block commits 8 rises; the newest is the edge before its last fall
            let newest_rise = if rising { b[14] } else { b[13] };
            if any || newest_rise > run_limit {
                break;
            }
            prev2 = b[14];
            prev = b[15];
            rises += 8;
            j += 16;
        }
        while j < n_max {
            let x = t[j];
            let is_rise = rising ^ (j % 2 == 1);
            if bad(x.wrapping_sub(prev), if is_rise { gl } else { gh })
                || near(x.wrapping_sub(prev2), gp[usize::from(is_rise)])
            {
                return j;
            }
            if !is_rise {
                // this fall commits the rise `prev`: not one that closes the short run, and
                // the rise that completes the refresh segment ends the stretch
                if prev > run_limit {
                    return j;
                }
                rises += 1;
                if rises == max_rises {
                    return j + 1;
                }
            }
            prev2 = prev;
            prev = x;
            j += 1;
        }
        n_max
    }

    /// Take a clean stretch (at least two edges): the pending edge and all but the last of `t`
    /// are committed, the last becomes pending. With `check`, `t` is only the longest stretch
    /// the state allows and is checked once its arrays are made; without, it comes from
    /// [`ClockState::clean_len`]. False (and nothing done) when the state is not the steady
    /// one after all, or the check fails.
    #[inline(always)]
    fn bulk(&mut self, t: &[u64], rising: bool, check: Option<&Steady>) -> bool {
        let n = t.len();
        let (
            Some((pt, pr)),
            Some(lr),
            Some(lf),
            Some(pp),
            Some((k0, t0)),
            Some((_, kidx)),
            Some((pref, _, _)),
            Some(a),
        ) = (
            self.pending,
            self.last_rise,
            self.last_fall,
            self.prev_period,
            self.fit_origin,
            self.anchor,
            self.refs,
            self.acc.as_mut(),
        )
        else {
            return false;
        };
        let sc = &mut *self.scratch;
        // committed edges c_0 = pt, c_j = t[j − 1]; split into rises and falls after the last
        // committed rise and fall
        sc.rises[0] = lr;
        sc.falls[0] = lf;
        let (nr, nf) = if pr {
            (n.div_ceil(2), n / 2)
        } else {
            (n / 2, n.div_ceil(2))
        };
        let (first, second) = if pr {
            (&mut sc.rises, &mut sc.falls)
        } else {
            (&mut sc.falls, &mut sc.rises)
        };
        first[1] = pt;
        // pairs (t[2k], t[2k + 1]): when n is even the last pair's second edge is the pending
        // one, written one past the committed ones and not read
        for ((p, f), s) in t
            .chunks_exact(2)
            .zip(first[2..].iter_mut())
            .zip(second[1..].iter_mut())
        {
            *s = p[0];
            *f = p[1];
        }
        let rises = &sc.rises[..=nr];
        let falls = &sc.falls[..=nf];
        // periods, lows, highs (a low ends at a rise, a high at a fall), each with its extremes
        let (low_from, high_from) = if pr { (0, 1) } else { (1, 0) };
        let ep = diff_extremes(&mut sc.period[..nr], &rises[1..], rises);
        let el = diff_extremes(&mut sc.low[..nr], &rises[1..], &falls[low_from..]);
        let eh = diff_extremes(&mut sc.high[..nf], &falls[1..], &rises[high_from..]);
        if let Some(st) = check {
            // every committed gap is a low or a high, every committed edge lies far enough
            // from the one of its polarity before; then the last edge's own gap and spacing,
            // and the newest rise a fall commits (the rises of a clean stretch increase)
            let last_rises = rising ^ n.is_multiple_of(2);
            let before = if n == 2 { st.pt } else { t[n - 3] };
            let last = (
                t[n - 1].wrapping_sub(t[n - 2]),
                t[n - 1].wrapping_sub(before),
                last_rises,
            );
            // a fall's spacing is a low plus a high: the sum of their minima bounds it, and
            // only when that bound is short of the threshold is it taken edge by edge
            let bound = el.0.saturating_add(eh.0);
            let fall_spacing = if i128::from(bound) >= i128::from(st.gp[0]) {
                bound
            } else {
                diff_extremes(&mut sc.tmp[..nf], &falls[1..], falls).0
            };
            let newest = match (last_rises, n) {
                (false, _) => t[n - 2],
                (true, 2) => st.pt,
                (true, _) => t[n - 3],
            };
            if !st.clean([el, eh], [ep.0, fall_spacing], last, newest) {
                return false;
            }
        }
        let (period, low, high) = (&sc.period[..nr], &sc.low[..nr], &sc.high[..nf]);
        let rise_ticks = &rises[1..];
        let idx0 = kidx + 1;
        a.cover(rises[0], rises[nr]);
        // the histograms first: for a wider run they give the sums too
        let rp = a.hist_period.record_run_about(period, ep.0, ep.1);
        a.period.add_sums(&rp, period, rise_ticks, idx0);
        let rl = a.hist_low.record_run_about(low, el.0, el.1);
        a.low.add_sums(&rl, low, rise_ticks, idx0);
        let rh = a.hist_high.record_run_about(high, eh.0, eh.1);
        a.high
            .add_sums(&rh, high, &falls[1..], kidx + high_from as u64);
        let (sum_p, sum_l, sum_h) = (rp.sum(), rl.sum(), rh.sum());
        // cycle to cycle (extremes taken while the differences are made)
        sc.tmp[0] = period[0] - pp;
        let (mut lo, mut hi) = (sc.tmp[0], sc.tmp[0]);
        for (o, w) in sc.tmp[1..nr].iter_mut().zip(period.windows(2)) {
            *o = w[1] - w[0];
            lo = lo.min(*o);
            hi = hi.max(*o);
        }
        let c2c = &sc.tmp[..nr];
        a.c2c
            .add_sums(&RunSums::about(c2c, lo, hi), c2c, rise_ticks, idx0);
        // N-cycle errors: rise k of this step against the rise N before it in the run
        self.rises.extend(rise_ticks);
        let all = self.rises.as_slice();
        let base = all.len() - nr;
        for (i, &nc) in self.cfg.n_cycles.iter().enumerate() {
            let nc = nc as usize;
            let from = nc.saturating_sub(base);
            if from >= nr {
                continue;
            }
            let shift = nc as i64 * pref;
            let cur = &all[base + from..];
            let back = &all[base + from - nc..base + nr - nc];
            let (mut lo, mut hi) = (i64::MAX, i64::MIN);
            for ((o, &c), &b) in sc.tmp.iter_mut().zip(cur).zip(back) {
                *o = (c - b) as i64 - shift;
                lo = lo.min(*o);
                hi = hi.max(*o);
            }
            let e = &sc.tmp[..nr - from];
            a.ncycle[i].add_sums(
                &RunSums::about(e, lo, hi),
                e,
                &rise_ticks[from..],
                idx0 + from as u64,
            );
        }
        // the TIE fit: kk = idx − k0 and u = t − t0 − kk·pref, summed through the step's first
        // rise (kk0, u0) plus small offsets v, exactly as the per-edge sums; afterwards
        // u = u_off + tmp[k] for the Allan samples
        let kk0 = i128::from(idx0) - i128::from(k0);
        let u0 = i128::from(rise_ticks[0]) - i128::from(t0) - kk0 * i128::from(pref);
        let r0 = rise_ticks[0];
        let (mut lo, mut hi) = (i64::MAX, i64::MIN);
        if let Ok(p32) = u32::try_from(pref) {
            // k < CAP and a reference period below 2^32 ticks: 32×32-bit products
            for (k, (v, &r)) in sc.tmp.iter_mut().zip(rise_ticks).enumerate() {
                *v = (r - r0) as i64 - (u64::from(k as u32) * u64::from(p32)) as i64;
                lo = lo.min(*v);
                hi = hi.max(*v);
            }
        } else {
            for (k, (v, &r)) in sc.tmp.iter_mut().zip(rise_ticks).enumerate() {
                *v = (r - r0) as i64 - k as i64 * pref;
                lo = lo.min(*v);
                hi = hi.max(*v);
            }
        }
        let v = &sc.tmp[..nr];
        // Σk·(v − lo) in the same pass as the sums when the offsets are narrow
        let (rv, ske) = RunSums::about_weighted(v, lo, hi, true);
        let fit = &mut self.stretch;
        let nr128 = nr as i128;
        let u_off = if !fit.big
            && kk0 >= 0
            && kk0 + nr128 < FIT_LIM
            && u0.abs() < FIT_LIM / 2
            && rv.lo > -(1 << 26)
            && rv.hi < 1 << 26
            && fit.n + nr128 <= FIT_LIM
            && let Some(ske) = ske
        {
            // Σk·v = Σk·(v − lo) + lo·Σk
            let lo = i128::from(rv.lo);
            let sk = nr128 * (nr128 - 1) / 2;
            let sv = rv.sum();
            let skv = i128::from(ske) + lo * sk;
            let svv = rv.sum_ee + 2 * lo * rv.sum_e + nr128 * lo * lo;
            let skk = (nr128 - 1) * nr128 * (2 * nr128 - 1) / 6;
            fit.n += nr128;
            fit.sk += nr128 * kk0 + sk;
            fit.skk += nr128 * kk0 * kk0 + 2 * kk0 * sk + skk;
            fit.su += nr128 * u0 + sv;
            fit.sku += nr128 * kk0 * u0 + kk0 * sv + u0 * sk + skv;
            fit.suu += nr128 * u0 * u0 + 2 * u0 * sv + svv;
            u0 as i64
        } else {
            // the per-edge arithmetic, clamped as there
            let clamp =
                |v: i128| v.clamp(i128::from(i64::MIN / 4), i128::from(i64::MAX / 4)) as i64;
            for (k, (slot, &r)) in sc.tmp.iter_mut().zip(rise_ticks).enumerate() {
                let kk = clamp(kk0 + k as i128);
                let u = clamp(i128::from(r) - i128::from(t0) - i128::from(kk) * i128::from(pref));
                *slot = u;
                fit.add(kk, u);
            }
            0
        };
        // batch sums of BATCH contiguous periods, a slice sum per completed batch
        let mut from = 0;
        while from < nr {
            let need = (BATCH - self.batch_n) as usize;
            let to = (from + need).min(nr);
            self.batch_sum += period[from..to].iter().sum::<i64>();
            self.batch_n += (to - from) as u32;
            if self.batch_n == BATCH {
                a.batch.add(
                    std::mem::take(&mut self.batch_sum),
                    rise_ticks[to - 1],
                    idx0 + (to - 1) as u64,
                );
                self.batch_n = 0;
            }
            from = to;
        }
        // detrended TIE records
        let mut rest = rise_ticks;
        while !rest.is_empty() {
            let take = rest
                .len()
                .min(self.cfg.tie_record.saturating_sub(self.record.len()).max(1));
            self.record.extend_from_slice(&rest[..take]);
            rest = &rest[take..];
            if self.record.len() >= self.cfg.tie_record {
                a.add_tie_record(close_record(
                    &mut self.record,
                    &mut sc.tie,
                    &mut self.records_out,
                ));
            }
        }
        // Allan phase samples every `allan_every` periods
        if self.allan_countdown > nr as u64 {
            self.allan_countdown -= nr as u64;
        } else if let Some(al) = self.allan.as_mut() {
            // as the per-edge countdown: the first sample at period countdown − 1 (0 when
            // 0), then every `allan_every`, the countdown left for after the step
            let every = usize::try_from(self.allan_every.max(1)).unwrap_or(usize::MAX);
            let mut k = self.allan_countdown.max(1) as usize - 1;
            let mut last = k;
            while k < nr {
                al.push((u_off + sc.tmp[k]) as f64 * self.tick_ns);
                last = k;
                k = k.saturating_add(every);
            }
            self.allan_countdown = (every - (nr - 1 - last)) as u64;
        }
        // the short run and the refresh segment
        let run = &mut self.run;
        run.n += nr as u64;
        run.sum_p += sum_p as u64;
        run.last = rises[nr];
        run.min_l = run.min_l.min(rl.lo as u64);
        if nf > 0 {
            run.sum_h += sum_h as u64;
            run.nh += nf as u64;
            run.min_h = run.min_h.min(rh.lo as u64);
        }
        for (seg, (sum, cnt)) in self
            .seg
            .iter_mut()
            .zip([(sum_p, nr), (sum_h, nf), (sum_l, nr)])
        {
            seg_add(seg, sum as u64, cnt as u64);
        }
        // edges seen, and the channel's state after the step
        a.edges += n as u64;
        self.pending = Some((t[n - 1], rising ^ n.is_multiple_of(2)));
        self.last_edge = Some(t[n - 2]);
        self.last_rise = Some(rises[nr]);
        self.last_fall = Some(falls[nf]);
        self.prev_period = Some(period[nr - 1]);
        self.anchor = Some((rises[nr], kidx + nr as u64));
        self.count_periods(nr as u32);
        true
    }
}

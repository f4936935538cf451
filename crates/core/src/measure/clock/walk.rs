//! How much of the tick's quantisation survives in a mean phase time. A clock whose period is
//! (close to) a ratio of small integers in ticks puts its edges on a few phases of the tick
//! only; the quantisation error of a mean then does not average away, however many cycles are
//! taken. Edges that walk across the tick (a period a little off such a ratio, or random
//! jitter dithering the stamps) average it out.

use std::f64::consts::PI;

/// Cluster counts tried: 1 (every edge at one phase) to 1024 (errors under 1/2048 tick), and
/// never more than the cycles observed.
const MAX_CLUSTERS: u32 = 1024;

/// Standard uncertainty, in ticks, that quantisation leaves in a mean phase time (a high or a
/// low time: the difference of two stamps) over `cycles` cycles of mean period `period_ticks`
/// (known to ± `delta_ticks`), with per-edge random jitter of at least `dither_ticks` RMS.
///
/// For each cluster count b the edges fall in b groups one b-th of a tick apart; over the
/// record each group walks (cycles/b)·‖b·P‖, known to ± cycles·δ. Over phases no more than a
/// gap g apart the sawtooth error of a stamp averages to at most g/2, and Gaussian dither
/// smooths it further by exp(−2π²σ²/g²) (the first harmonic of the averaged sawtooth; Widrow,
/// Kollár & Liu, IEEE Trans. Instrum. Meas. 45(2), 1996). Two stamps per phase time: up to
/// twice that, taken as a rectangular distribution.
pub fn coherent_quantisation_ticks(
    period_ticks: f64,
    delta_ticks: f64,
    cycles: f64,
    dither_ticks: f64,
) -> f64 {
    if !(period_ticks.is_finite() && cycles >= 1.0) {
        return 1.0 / 3f64.sqrt();
    }
    let sigma = dither_ticks.max(0.0);
    let unknown_walk = cycles * delta_ticks.max(0.0);
    let mut worst = 0.0f64;
    let most = (cycles.min(f64::from(MAX_CLUSTERS))) as u32;
    for b in 1..=most {
        let b = f64::from(b);
        let bp = b * period_ticks;
        let dist = (bp - bp.round()).abs();
        let span = ((cycles / b) * dist - unknown_walk).max(0.0);
        let gap = (1.0 / b - span).max(0.0);
        if gap > 0.0 {
            let per_edge = gap / 2.0 * (-2.0 * PI * PI * (sigma / gap).powi(2)).exp();
            worst = worst.max(per_edge);
        }
    }
    2.0 * worst / 3f64.sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Floor-quantised mean of a phase time `h` (ticks) over `n` cycles of period `p`,
    /// starting at phase `u0`: the exact arithmetic the probe's stamps perform.
    fn quantised_mean_error(p: f64, h: f64, u0: f64, n: usize) -> f64 {
        let mut sum = 0.0;
        for k in 0..n {
            let t = u0 + k as f64 * p;
            sum += (t + h).floor() - t.floor();
        }
        sum / n as f64 - h
    }

    #[test]
    fn commensurate_periods_keep_their_quantisation_error() {
        // period 62.5 ticks (2 MHz at 8 ns): two phases; 125 ticks: one
        for (p, clusters) in [(62.5, 2.0), (125.0, 1.0), (100.0 / 3.0, 3.0)] {
            let u = coherent_quantisation_ticks(p, 1.0 / 12_000.0, 12_000.0, 0.0);
            // the half-width of the error over every start phase and high time
            let mut worst: f64 = 0.0;
            for i in 0..40 {
                for j in 0..40 {
                    let h = 20.0 + f64::from(j) / 40.0;
                    let e = quantised_mean_error(p, h, f64::from(i) / 40.0, 2_000);
                    worst = worst.max(e.abs());
                }
            }
            // the stated uncertainty's half-width (√3·u) covers the worst error, and is not
            // above the largest it can be (one tick over the cluster count)
            assert!(
                3f64.sqrt() * u >= worst - 1e-9,
                "p {p}: u {u} worst {worst}"
            );
            assert!(3f64.sqrt() * u <= 1.0 / clusters + 1e-9, "p {p}: u {u}");
        }
    }

    #[test]
    fn a_walking_phase_averages_out() {
        // 62.5 ticks + 0.003 (a 2 MHz crystal 50 ppm off an 8 ns tick): the phases walk
        let u = coherent_quantisation_ticks(62.503, 1.0 / 400_000.0, 400_000.0, 0.0);
        assert!(u < 0.02, "u {u}");
        // and the exact arithmetic agrees the error is small
        let e = quantised_mean_error(62.503, 20.3, 0.1, 400_000);
        assert!(e.abs() < 0.01, "e {e}");
    }

    #[test]
    fn dither_smooths_the_error() {
        let bare = coherent_quantisation_ticks(125.0, 1e-5, 1e5, 0.0);
        let dithered = coherent_quantisation_ticks(125.0, 1e-5, 1e5, 0.5);
        assert!(dithered < bare * 0.01, "{dithered} vs {bare}");
    }

    #[test]
    fn a_record_too_short_to_show_the_walk_is_not_credited() {
        // 62.5 + 1e-5 ticks over 12 000 cycles: the walk (0.12 tick) is inside the ±1 tick
        // the record cannot resolve
        let u = coherent_quantisation_ticks(62.50001, 1.0 / 12_000.0, 12_000.0, 0.0);
        assert!(u > 0.2, "u {u}");
    }
}

//! Allan deviation (NIST SP 1065, "Handbook of Frequency Stability Analysis"): a streaming
//! overlapping estimator on phase samples, checked against the handbook's batch estimators
//! (kept with the tests) and its test data.

/// Largest octave τ = 2^k·τ0 the streaming estimator follows.
const MAX_OCTAVE: usize = 10;

/// Streaming overlapping Allan deviation at τ = 2^k·τ0 (k = 0…10) from phase samples (ns)
/// taken every τ0; memory is a ring of 2·2^10 + 1 samples.
#[derive(Clone, Debug, PartialEq)]
pub struct AllanStream {
    ring: Vec<f64>,
    next: usize,
    len: u64,
    sums: [f64; MAX_OCTAVE + 1],
    counts: [u64; MAX_OCTAVE + 1],
    /// Phase sample spacing, s.
    tau0_s: f64,
}

impl AllanStream {
    /// An estimator for phase samples `tau0_s` apart.
    pub fn new(tau0_s: f64) -> AllanStream {
        AllanStream {
            ring: vec![0.0; 2 * (1 << MAX_OCTAVE) + 1],
            next: 0,
            len: 0,
            sums: [0.0; MAX_OCTAVE + 1],
            counts: [0; MAX_OCTAVE + 1],
            tau0_s,
        }
    }

    /// Add the next phase sample (time error in ns).
    pub fn push(&mut self, x_ns: f64) {
        let cap = self.ring.len();
        self.ring[self.next] = x_ns;
        let at = |back: usize, ring: &Vec<f64>, next: usize| ring[(next + cap - back) % cap];
        for k in 0..=MAX_OCTAVE {
            let m = 1usize << k;
            if self.len >= (2 * m) as u64 {
                let d =
                    x_ns - 2.0 * at(m, &self.ring, self.next) + at(2 * m, &self.ring, self.next);
                self.sums[k] += d * d;
                self.counts[k] += 1;
            }
        }
        self.next = (self.next + 1) % cap;
        self.len += 1;
    }

    /// A gap in the phase samples: later differences never span it (the sums are kept).
    pub fn gap(&mut self) {
        self.len = 0;
    }

    /// (τ in s, overlapping ADEV (fractional), number of terms) for each octave with data.
    pub fn points(&self) -> Vec<(f64, f64, u64)> {
        (0..=MAX_OCTAVE)
            .filter(|&k| self.counts[k] > 0)
            .map(|k| {
                let tau = (1u64 << k) as f64 * self.tau0_s;
                let tau_ns = tau * 1e9;
                let v = (self.sums[k] / (2.0 * self.counts[k] as f64 * tau_ns * tau_ns)).sqrt();
                (tau, v, self.counts[k])
            })
            .collect()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Non-overlapping Allan deviation of fractional frequency data `y` (spacing τ0) at τ = m·τ0.
    pub fn adev(y: &[f64], m: usize) -> Option<f64> {
        if m == 0 {
            return None;
        }
        let groups: Vec<f64> = y
            .chunks_exact(m)
            .map(|c| c.iter().sum::<f64>() / m as f64)
            .collect();
        if groups.len() < 2 {
            return None;
        }
        let s: f64 = groups.windows(2).map(|w| (w[1] - w[0]).powi(2)).sum();
        Some((s / (2.0 * (groups.len() - 1) as f64)).sqrt())
    }

    /// Phase data from fractional frequency: x0 = 0, x(i+1) = x(i) + y(i)·τ0 (τ0 = 1).
    fn phase(y: &[f64]) -> Vec<f64> {
        let mut x = Vec::with_capacity(y.len() + 1);
        x.push(0.0);
        for v in y {
            x.push(x[x.len() - 1] + v);
        }
        x
    }

    /// Overlapping Allan deviation of fractional frequency data at τ = m·τ0.
    pub fn oadev(y: &[f64], m: usize) -> Option<f64> {
        oadev_phase(&phase(y), m, 1.0)
    }

    /// Overlapping Allan deviation from phase samples `x` spaced τ0 apart, at τ = m·τ0.
    pub fn oadev_phase(x: &[f64], m: usize, tau0: f64) -> Option<f64> {
        if m == 0 || x.len() < 2 * m + 1 {
            return None;
        }
        let n = x.len() - 2 * m;
        let s: f64 = (0..n)
            .map(|i| (x[i + 2 * m] - 2.0 * x[i + m] + x[i]).powi(2))
            .sum();
        let tau = m as f64 * tau0;
        Some((s / (2.0 * n as f64 * tau * tau)).sqrt())
    }

    /// Modified Allan deviation of fractional frequency data at τ = m·τ0.
    pub fn mdev(y: &[f64], m: usize) -> Option<f64> {
        let x = phase(y);
        if m == 0 || x.len() < 3 * m + 1 {
            return None;
        }
        let n = x.len();
        let terms = n - 3 * m + 1;
        let mut s = 0.0;
        for j in 0..terms {
            let mut inner = 0.0;
            for i in j..j + m {
                inner += x[i + 2 * m] - 2.0 * x[i + m] + x[i];
            }
            s += inner * inner;
        }
        let m = m as f64;
        Some((s / (2.0 * m.powi(4) * terms as f64)).sqrt())
    }

    const NBS14_9: [f64; 9] = [
        892.0, 809.0, 823.0, 798.0, 671.0, 644.0, 883.0, 903.0, 677.0,
    ];

    fn close(a: f64, b: f64, digits: i32) -> bool {
        (a - b).abs() <= 0.5 * 10f64.powi(-digits) * b.abs().max(1.0)
    }

    // NIST SP 1065, test suite "NBS14", 9-point fractional frequency data (τ0 = 1).
    #[test]
    fn nbs14_nine_point_set() {
        assert!(
            close(adev(&NBS14_9, 1).unwrap(), 91.22945, 5),
            "{}",
            adev(&NBS14_9, 1).unwrap()
        );
        assert!(
            close(adev(&NBS14_9, 2).unwrap(), 115.8082, 4),
            "{}",
            adev(&NBS14_9, 2).unwrap()
        );
        assert!(
            close(oadev(&NBS14_9, 2).unwrap(), 85.95287, 5),
            "{}",
            oadev(&NBS14_9, 2).unwrap()
        );
        assert!(
            close(mdev(&NBS14_9, 2).unwrap(), 74.78849, 5),
            "{}",
            mdev(&NBS14_9, 2).unwrap()
        );
    }

    // NIST SP 1065, 1000-point set: n0 = 1234567890, n(i+1) = 16807·n(i) mod 2147483647,
    // y(i) = n(i)/2147483647.
    fn thousand() -> Vec<f64> {
        // the set starts with n0 itself
        let mut n: u64 = 1_234_567_890;
        (0..1000)
            .map(|_| {
                let y = n as f64 / 2_147_483_647.0;
                n = (16807 * n) % 2_147_483_647;
                y
            })
            .collect()
    }

    #[test]
    fn nbs14_thousand_point_set() {
        let y = thousand();
        let rel = |a: f64, b: f64| ((a - b) / b).abs();
        assert!(
            rel(adev(&y, 1).unwrap(), 2.922319e-01) < 5e-7,
            "{}",
            adev(&y, 1).unwrap()
        );
        assert!(
            rel(adev(&y, 10).unwrap(), 9.965736e-02) < 5e-7,
            "{}",
            adev(&y, 10).unwrap()
        );
        assert!(
            rel(adev(&y, 100).unwrap(), 3.897804e-02) < 5e-7,
            "{}",
            adev(&y, 100).unwrap()
        );
        assert!(
            rel(oadev(&y, 10).unwrap(), 9.159953e-02) < 5e-7,
            "{}",
            oadev(&y, 10).unwrap()
        );
    }

    #[test]
    fn streaming_estimator_equals_the_batch_one() {
        let y = thousand();
        let x = phase(&y);
        // phase in "ns" with τ0 = 1 ns so fractional values match
        let mut s = AllanStream::new(1e-9);
        for v in &x {
            s.push(*v);
        }
        for (tau, v, _) in s.points() {
            let m = (tau / 1e-9).round() as usize;
            let b = oadev_phase(&x, m, 1.0).unwrap();
            assert!(((v - b) / b).abs() < 1e-9, "m {m}: {v} vs {b}");
        }
    }
}

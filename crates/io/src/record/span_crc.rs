//! CRC-32/ISO-HDLC of any span of a buffer in bounded work: register states kept every
//! [`STEP`] bytes, and the linearity of the CRC (a state carried over n bytes is the state times
//! x^(8n) modulo the polynomial, as in zlib's `crc32_combine`). A reader that must check many
//! overlapping candidate chunks (a file of fake sync markers) then costs a few KiB per
//! candidate instead of the candidate's length.

use crc::{CRC_32_ISO_HDLC, Crc, Table};

static CRC32: Crc<u32, Table<16>> = Crc::<u32, Table<16>>::new(&CRC_32_ISO_HDLC);

/// Bytes between kept register states.
pub(super) const STEP: usize = 1024;
/// The reflected polynomial.
const POLY: u32 = 0xEDB8_8320;
/// Initial register (and final XOR) of CRC-32/ISO-HDLC.
const ONES: u32 = 0xFFFF_FFFF;

/// The register after `bytes`, starting from `register` (reflected, before the final XOR).
fn advance(register: u32, bytes: &[u8]) -> u32 {
    let mut d = CRC32.digest_with_initial(register.reverse_bits());
    d.update(bytes);
    d.finalize() ^ ONES
}

/// a · b modulo the polynomial, both reflected (bit 31 is x^0).
const fn mul(a: u32, mut b: u32) -> u32 {
    let mut m = 1u32 << 31;
    let mut p = 0;
    loop {
        if a & m != 0 {
            p ^= b;
            if a & (m - 1) == 0 {
                return p;
            }
        }
        m >>= 1;
        b = if b & 1 != 0 { (b >> 1) ^ POLY } else { b >> 1 };
        if m == 0 {
            return p;
        }
    }
}

/// x^(8·2^k) modulo the polynomial, reflected, for k = 0 … 63.
const X8_POW2: [u32; 64] = {
    let mut t = [0u32; 64];
    let mut sq = 1u32 << (31 - 8); // x^8
    let mut k = 0;
    while k < 64 {
        t[k] = sq;
        sq = mul(sq, sq);
        k += 1;
    }
    t
};

/// x^(8·n) modulo the polynomial, reflected.
fn x_pow_8n(n: u64) -> u32 {
    let mut p = 1u32 << 31; // x^0
    let mut n = n;
    let mut k = 0;
    while n != 0 {
        if n & 1 != 0 {
            p = mul(X8_POW2[k], p);
        }
        n >>= 1;
        k += 1;
    }
    p
}

/// Register states of a buffer every [`STEP`] bytes from its start, filled as needed.
#[derive(Debug, Default)]
pub(super) struct SpanCrc {
    /// states[i]: the register after bytes 0 … i·STEP of the buffer, from the initial value.
    states: Vec<u32>,
}

impl SpanCrc {
    /// Forget every state (the buffer moved).
    pub(super) fn clear(&mut self) {
        self.states.clear();
    }

    /// The register after `buf[..at]`.
    fn state_at(&mut self, buf: &[u8], at: usize) -> u32 {
        if self.states.is_empty() {
            self.states.push(ONES);
        }
        let want = at / STEP;
        while self.states.len() <= want {
            let i = self.states.len();
            let prev = self.states[i - 1];
            self.states
                .push(advance(prev, &buf[(i - 1) * STEP..i * STEP]));
        }
        advance(self.states[want], &buf[want * STEP..at])
    }

    /// CRC-32/ISO-HDLC of `buf[start..end]`.
    pub(super) fn crc(&mut self, buf: &[u8], start: usize, end: usize) -> u32 {
        if end - start <= 4 * STEP {
            return advance(ONES, &buf[start..end]) ^ ONES;
        }
        // state(end) = fresh(span) ^ shift(state(start)) with fresh(span) from a zero register;
        // the span's own CRC starts from all ones instead
        let a = self.state_at(buf, start);
        let b = self.state_at(buf, end);
        let shift = x_pow_8n((end - start) as u64);
        b ^ mul(shift, a ^ ONES) ^ ONES
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Spans of every length class against the crc crate's CRC-32/ISO-HDLC over the span alone
    /// (an independent general-purpose implementation).
    #[test]
    fn span_crcs_equal_a_direct_crc() {
        let mut x: u64 = 7;
        let buf: Vec<u8> = (0..200_000)
            .map(|_| {
                x = x
                    .wrapping_mul(6364136223846793005)
                    .wrapping_add(1442695040888963407);
                (x >> 56) as u8
            })
            .collect();
        let mut s = SpanCrc::default();
        for k in 0..400u64 {
            let a = ((k * 7919 * 13) % 150_000) as usize;
            let len = [0usize, 1, 4095, 4096, 4097, 5000, 40_000, 49_999][k as usize % 8];
            let b = (a + len).min(buf.len());
            assert_eq!(
                s.crc(&buf, a, b),
                CRC32.checksum(&buf[a..b]),
                "span {a}..{b}"
            );
        }
        // check value of the catalogue of parametrised CRC algorithms
        let nine = b"123456789";
        assert_eq!(s.crc(nine, 0, 9), 0xCBF4_3926);
    }
}

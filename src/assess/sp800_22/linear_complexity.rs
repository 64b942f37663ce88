//! Linear complexity test, SP 800-22 section 2.10 (statistics.md 2.10 and
//! 3.6), with a word-packed Berlekamp–Massey and its plain twin.

use crate::assess::special::igamc;
use serde::Serialize;

/// Class probabilities.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum LcTable {
    /// π_0 = 0.01047 and π_6 = 0.020833, the others exact: what section
    /// 2.10.8 and Appendix B need. statistics.md section 6 item 9 names
    /// only π_0; LC-2 (χ² = 2.700348212) reproduces only if π_6 is also the
    /// 6-decimal 0.020833 (with 1/48 it is 2.700162). Default.
    #[default]
    Published,
    /// The exact limits 1/96, 1/32, 1/8, 1/2, 1/4, 1/16, 1/48.
    Exact,
}

impl LcTable {
    /// The class probabilities π_0 … π_6.
    pub fn pis(self) -> [f64; 7] {
        match self {
            LcTable::Published => [
                0.01047,
                1.0 / 32.0,
                1.0 / 8.0,
                0.5,
                0.25,
                1.0 / 16.0,
                0.020833,
            ],
            LcTable::Exact => [
                1.0 / 96.0,
                1.0 / 32.0,
                1.0 / 8.0,
                0.5,
                0.25,
                1.0 / 16.0,
                1.0 / 48.0,
            ],
        }
    }
}

/// Linear complexity of `s` by the Berlekamp–Massey algorithm, plain
/// version over bytes (the oracle).
pub fn berlekamp_massey_naive(s: &[u8]) -> usize {
    let n = s.len();
    let mut c = vec![0u8; n + 1];
    let mut b = vec![0u8; n + 1];
    c[0] = 1;
    b[0] = 1;
    let (mut l, mut m) = (0usize, -1i64);
    for i in 0..n {
        let mut d = s[i];
        for j in 1..=l {
            d ^= c[j] & s[i - j];
        }
        if d == 1 {
            let t = c.clone();
            let shift = (i as i64 - m) as usize;
            for j in 0..=n - shift {
                c[j + shift] ^= b[j];
            }
            if 2 * l <= i {
                l = i + 1 - l;
                m = i as i64;
                b = t;
            }
        }
    }
    l
}

/// Word-packed Berlekamp–Massey (same result as
/// [`berlekamp_massey_naive`]). The sequence is stored reversed so that the
/// discrepancy is the parity of C AND a contiguous window of it.
pub fn berlekamp_massey(s: &[u8]) -> usize {
    let n = s.len();
    let nw = n.div_ceil(64) + 1;
    // rev bit k = s[n-1-k]
    let mut rev = vec![0u64; nw + 1];
    for (i, &b) in s.iter().enumerate() {
        let k = n - 1 - i;
        rev[k / 64] |= (b as u64) << (k % 64);
    }
    let mut c = vec![0u64; nw];
    let mut b = vec![0u64; nw];
    let mut t = vec![0u64; nw];
    c[0] = 1;
    b[0] = 1;
    let (mut l, mut m) = (0usize, -1i64);
    for i in 0..n {
        // d = Σ_{j=0}^{l} c_j s_{i-j}; s_{i-j} = rev bit (n-1-i+j).
        let base = n - 1 - i;
        let words = l / 64 + 1;
        let mut acc = 0u64;
        for (w, &cw) in c.iter().enumerate().take(words) {
            let bit = base + 64 * w;
            let (q, r) = (bit / 64, bit % 64);
            let mut win = rev[q] >> r;
            if r != 0 {
                win |= rev[q + 1] << (64 - r);
            }
            acc ^= cw & win;
        }
        // mask coefficients beyond l (they are zero in c anyway)
        if acc.count_ones() & 1 == 1 {
            t.copy_from_slice(&c);
            let shift = (i as i64 - m) as usize;
            let (ws, bs) = (shift / 64, shift % 64);
            for w in (ws..nw).rev() {
                let src = w - ws;
                let mut v = b[src] << bs;
                if bs != 0 && src > 0 {
                    v |= b[src - 1] >> (64 - bs);
                }
                c[w] ^= v;
            }
            if 2 * l <= i {
                l = i + 1 - l;
                m = i as i64;
                std::mem::swap(&mut b, &mut t);
            }
        }
    }
    l
}

/// Result of the linear complexity test.
#[derive(Clone, Debug, Serialize)]
pub struct LinearComplexity {
    /// Block length M.
    pub m: usize,
    /// Blocks N.
    pub blocks: usize,
    /// Class counts ν_0 … ν_6.
    pub nu: [u64; 7],
    /// χ².
    pub chi_square: f64,
    /// P = igamc(3, χ²/2).
    pub p_value: f64,
}

/// μ = M/2 + (9 + (−1)^(M+1))/36 − (M/3 + 2/9)/2^M (SP 800-22 section
/// 2.10.4 step 3; statistics.md 2.10).
pub fn mean(m: usize) -> f64 {
    let mf = m as f64;
    let sign = if (m + 1).is_multiple_of(2) { 1.0 } else { -1.0 };
    mf / 2.0 + (9.0 + sign) / 36.0 - (mf / 3.0 + 2.0 / 9.0) / 2f64.powi(m as i32)
}

/// T_i = (−1)^M (L_i − μ) + 2/9 (statistics.md 2.10).
pub fn t_statistic(m: usize, l: usize) -> f64 {
    let sign = if m.is_multiple_of(2) { 1.0 } else { -1.0 };
    sign * (l as f64 - mean(m)) + 2.0 / 9.0
}

fn class_of(t: f64) -> usize {
    if t <= -2.5 {
        0
    } else if t <= -1.5 {
        1
    } else if t <= -0.5 {
        2
    } else if t <= 0.5 {
        3
    } else if t <= 1.5 {
        4
    } else if t <= 2.5 {
        5
    } else {
        6
    }
}

/// Linear complexity test with blocks of M bits (SP 800-22 section 2.10;
/// statistics.md 2.10).
///
/// # Panics
/// If `x` is shorter than one block.
pub fn linear_complexity(x: &[u8], m: usize, table: LcTable) -> LinearComplexity {
    linear_complexity_with(x, m, &table.pis())
}

/// [`linear_complexity`] with explicit class probabilities π_0 … π_6.
///
/// # Panics
/// If `x` is shorter than one block.
pub fn linear_complexity_with(x: &[u8], m: usize, pis: &[f64; 7]) -> LinearComplexity {
    assert!(
        m > 0 && x.len() >= m,
        "linear complexity: {} bits, M = {m}",
        x.len()
    );
    let blocks = x.len() / m;
    let mut nu = [0u64; 7];
    for blk in x.chunks_exact(m) {
        nu[class_of(t_statistic(m, berlekamp_massey(blk)))] += 1;
    }
    let nf = blocks as f64;
    let chi_square = nu
        .iter()
        .zip(pis)
        .map(|(&v, &p)| (v as f64 - nf * p).powi(2) / (nf * p))
        .sum::<f64>();
    LinearComplexity {
        m,
        blocks,
        nu,
        chi_square,
        p_value: igamc(3.0, chi_square / 2.0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::bits;
    use proptest::prelude::*;

    /// statistics.md 2.10, LC-1 (SP 800-22 section 2.10.4, from memory; R).
    #[test]
    fn section_2_10_linear_complexity_lc1() {
        let s = bits("1101011110001");
        assert_eq!(berlekamp_massey(&s), 4);
        assert_eq!(berlekamp_massey_naive(&s), 4);
        assert!((mean(13) - 6.777222).abs() <= 5e-7);
        let t = t_statistic(13, 4);
        assert!((t - 2.999444).abs() <= 5e-7);
        assert_eq!(class_of(t), 6);
    }

    /// Common practice: an m-sequence of the primitive x^5 + x^2 + 1 has
    /// linear complexity 5; the all-zero string 0; 0…01 of length n has n.
    #[test]
    fn berlekamp_massey_known_sequences() {
        let mut s = vec![1u8, 0, 0, 0, 0];
        for i in 5..62 {
            s.push(s[i - 3] ^ s[i - 5]);
        }
        assert_eq!(berlekamp_massey(&s), 5);
        assert_eq!(berlekamp_massey(&[0u8; 100]), 0);
        let mut z = vec![0u8; 99];
        z.push(1);
        assert_eq!(berlekamp_massey(&z), 100);
    }

    proptest! {
        /// The packed version equals the plain one on random blocks.
        #[test]
        fn packed_matches_naive(s in proptest::collection::vec(0u8..2, 1..700)) {
            prop_assert_eq!(berlekamp_massey(&s), berlekamp_massey_naive(&s));
        }
    }
}

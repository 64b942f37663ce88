//! Maurer's universal statistical test, SP 800-22 section 2.9
//! (statistics.md 2.9 and 3.3).

use crate::assess::special::erfc;
use serde::Serialize;

/// expectedValue(L) and variance(L) for L = 1 … 16 as printed in SP 800-22
/// section 2.9.4 step 5 (statistics.md 3.3, from memory, all rows R).
pub const TABLE: [(f64, f64); 16] = [
    (0.7326495, 0.690),
    (1.5374383, 1.338),
    (2.4016068, 1.901),
    (3.3112247, 2.358),
    (4.2534266, 2.705),
    (5.2177052, 2.954),
    (6.1962507, 3.125),
    (7.1836656, 3.238),
    (8.1764248, 3.311),
    (9.1723243, 3.356),
    (10.170032, 3.384),
    (11.168765, 3.401),
    (12.168070, 3.410),
    (13.167693, 3.416),
    (14.167488, 3.419),
    (15.167379, 3.421),
];

/// The L recommended for n bits (SP 800-22 section 2.9.7; statistics.md
/// 3.3): the largest L in 6..=16 with n ≥ 1010 · L · 2^L, with
/// Q = 10 · 2^L; `None` below 387,840 bits.
pub fn recommended(n: usize) -> Option<(usize, usize)> {
    (6..=16)
        .rev()
        .find(|&l| n as u64 >= 1010 * l as u64 * (1u64 << l))
        .map(|l| (l, 10 << l))
}

/// Result of the universal test.
#[derive(Clone, Debug, Serialize)]
pub struct Universal {
    /// Block length L.
    pub l: usize,
    /// Initialisation blocks Q.
    pub q: usize,
    /// Test blocks K = ⌊n/L⌋ − Q.
    pub k: usize,
    /// Σ log2 of the distances.
    pub sum: f64,
    /// fn = sum/K.
    pub f_n: f64,
    /// σ = c √(variance/K).
    pub sigma: f64,
    /// P = erfc(|fn − expectedValue| / (√2 σ)).
    pub p_value: f64,
}

/// Maurer's universal test (SP 800-22 section 2.9; statistics.md 2.9).
///
/// # Panics
/// If L is not in 1..=16 or there are no test blocks.
pub fn universal(x: &[u8], l: usize, q: usize) -> Universal {
    assert!((1..=16).contains(&l), "universal: L = {l}");
    let blocks = x.len() / l;
    assert!(blocks > q, "universal: {blocks} blocks for Q = {q}");
    let k = blocks - q;
    let mut last = vec![0usize; 1 << l];
    let value = |i: usize| {
        x[i * l..(i + 1) * l]
            .iter()
            .fold(0usize, |a, &b| a << 1 | b as usize)
    };
    for i in 1..=q {
        last[value(i - 1)] = i;
    }
    let mut sum = 0.0;
    for i in q + 1..=q + k {
        let v = value(i - 1);
        sum += ((i - last[v]) as f64).log2();
        last[v] = i;
    }
    let f_n = sum / k as f64;
    let (expected, variance) = TABLE[l - 1];
    let lf = l as f64;
    let c = 0.7 - 0.8 / lf + (4.0 + 32.0 / lf) * (k as f64).powf(-3.0 / lf) / 15.0;
    let sigma = c * (variance / k as f64).sqrt();
    Universal {
        l,
        q,
        k,
        sum,
        f_n,
        sigma,
        p_value: erfc((f_n - expected).abs() / (std::f64::consts::SQRT_2 * sigma)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::bits;

    /// statistics.md 2.9, UN-1 (SP 800-22 section 2.9.4, from memory; R*).
    /// The small example divides by √2·√variance instead of the formula's
    /// σ = c√(variance/K) (statistics.md section 6 item 8); we test the
    /// printed sum and fn, and the P-value the formula gives (recomputed:
    /// 0.0634535024), with σ = 0.1845101.
    #[test]
    fn section_2_9_universal_un1_recomputed() {
        let r = universal(&bits("01011010011101010111"), 2, 4);
        assert_eq!(r.k, 6);
        assert!((r.sum - 7.169925).abs() <= 5e-7);
        assert!((r.f_n - 1.1949875).abs() <= 5e-8);
        assert!((r.sigma - 0.1845101).abs() <= 5e-8);
        assert!((r.p_value - 0.0634535024).abs() < 1e-8);
        // The printed P = 0.767189 follows from σ = √1.338.
        let p = erfc((r.f_n - TABLE[1].0).abs() / (std::f64::consts::SQRT_2 * 1.338f64.sqrt()));
        assert!((p - 0.767189).abs() <= 5e-7);
    }

    /// statistics.md 3.3: recommended L and the minimum lengths.
    #[test]
    fn section_3_3_recommended_block_length() {
        assert_eq!(recommended(387_839), None);
        assert_eq!(recommended(387_840), Some((6, 640)));
        assert_eq!(recommended(1_000_000), Some((7, 1280)));
        assert_eq!(recommended(2_068_480), Some((8, 2560)));
        assert_eq!(recommended(1_059_061_760), Some((16, 655_360)));
    }

    /// statistics.md 3.3: the printed expectedValue agrees with the series
    /// Σ 2^(−L)(1 − 2^(−L))^(i−1) log2 i to the printed digits (checked for
    /// L ≤ 8, where the series converges quickly enough for a unit test).
    #[test]
    fn section_3_3_expected_value_series() {
        for l in 1..=8 {
            let p = 2f64.powi(-(l as i32));
            let (mut s, mut s2, mut w) = (0.0, 0.0, p);
            for i in 1..2_000_000u64 {
                let lg = (i as f64).log2();
                s += w * lg;
                s2 += w * lg * lg;
                w *= 1.0 - p;
            }
            let var = s2 - s * s;
            assert!((s - TABLE[l - 1].0).abs() < 5e-7, "L={l}: {s}");
            // variance printed to 3 decimals (L = 8 truncated, statistics.md 3.3)
            assert!((var - TABLE[l - 1].1).abs() < 1e-3, "L={l}: {var}");
        }
    }
}

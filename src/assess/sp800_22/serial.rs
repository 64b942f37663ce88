//! Serial test (SP 800-22 section 2.11) and approximate entropy test
//! (section 2.12), both on the sequence extended cyclically
//! (statistics.md 2.11 and 2.12).

use crate::assess::special::igamc;
use serde::Serialize;

/// Counts of the overlapping m-bit patterns (first bit most significant) of
/// `x` extended cyclically by its first m − 1 bits; n counts in all.
/// For m = 0 the single count is n.
pub fn cyclic_counts(x: &[u8], m: usize) -> Vec<u64> {
    let n = x.len();
    let mut counts = vec![0u64; 1 << m];
    if m == 0 {
        counts[0] = n as u64;
        return counts;
    }
    let mask = (1usize << m) - 1;
    let mut v = 0usize;
    for &b in x.iter().take(m - 1) {
        v = v << 1 | b as usize;
    }
    for i in 0..n {
        let b = x[(i + m - 1) % n];
        v = (v << 1 | b as usize) & mask;
        counts[v] += 1;
    }
    counts
}

/// ψ²_m = (2^m/n) Σ ν² − n, with ψ²_0 = ψ²_−1 = 0 (statistics.md 2.11).
pub fn psi_square(x: &[u8], m: i64) -> f64 {
    if m <= 0 {
        return 0.0;
    }
    let counts = cyclic_counts(x, m as usize);
    let n = x.len() as f64;
    let sum: u128 = counts.iter().map(|&c| c as u128 * c as u128).sum();
    2f64.powi(m as i32) / n * sum as f64 - n
}

/// Result of the serial test.
#[derive(Clone, Debug, Serialize)]
pub struct Serial {
    /// Pattern length m.
    pub m: usize,
    /// ψ²_m, ψ²_{m−1}, ψ²_{m−2}.
    pub psi: [f64; 3],
    /// ∇ψ²_m.
    pub del1: f64,
    /// ∇²ψ²_m.
    pub del2: f64,
    /// P1 = igamc(2^(m−2), ∇ψ²_m/2).
    pub p_value1: f64,
    /// P2 = igamc(2^(m−3), ∇²ψ²_m/2).
    pub p_value2: f64,
}

/// Serial test (SP 800-22 section 2.11; statistics.md 2.11).
///
/// # Panics
/// If `m < 2` or `x` is empty.
pub fn serial(x: &[u8], m: usize) -> Serial {
    assert!(
        m >= 2 && !x.is_empty(),
        "serial: m = {m} on {} bits",
        x.len()
    );
    let mi = m as i64;
    let psi = [
        psi_square(x, mi),
        psi_square(x, mi - 1),
        psi_square(x, mi - 2),
    ];
    let del1 = psi[0] - psi[1];
    let del2 = psi[0] - 2.0 * psi[1] + psi[2];
    Serial {
        m,
        psi,
        del1,
        del2,
        // Rounding can push a zero statistic a hair below 0.
        p_value1: igamc(2f64.powi(mi as i32 - 2), (del1 / 2.0).max(0.0)),
        p_value2: igamc(2f64.powi(mi as i32 - 3), (del2 / 2.0).max(0.0)),
    }
}

/// Result of the approximate entropy test.
#[derive(Clone, Debug, Serialize)]
pub struct ApproximateEntropy {
    /// Block length m.
    pub m: usize,
    /// φ(m) and φ(m+1).
    pub phi: [f64; 2],
    /// ApEn = φ(m) − φ(m+1).
    pub ap_en: f64,
    /// χ² = 2n(ln 2 − ApEn).
    pub chi_square: f64,
    /// P = igamc(2^(m−1), χ²/2).
    pub p_value: f64,
}

fn phi(x: &[u8], m: usize) -> f64 {
    let n = x.len() as f64;
    cyclic_counts(x, m)
        .iter()
        .filter(|&&c| c > 0)
        .map(|&c| {
            let p = c as f64 / n;
            p * p.ln()
        })
        .sum()
}

/// Approximate entropy test (SP 800-22 section 2.12; statistics.md 2.12).
///
/// # Panics
/// If `m == 0` or `x` is empty.
pub fn approximate_entropy(x: &[u8], m: usize) -> ApproximateEntropy {
    assert!(m >= 1 && !x.is_empty(), "approximate entropy: m = {m}");
    let phi = [phi(x, m), phi(x, m + 1)];
    let ap_en = phi[0] - phi[1];
    // χ² = 2n(ln 2 − ApEn) suffers cancellation for large n; since
    // φ(m) = (1/n) Σ c ln c − ln n, ApEn = (S_m − S_{m+1})/n with
    // S_m = Σ c ln c, which is computed without it.
    let s = |m: usize| {
        cyclic_counts(x, m)
            .iter()
            .filter(|&&c| c > 0)
            .map(|&c| c as f64 * (c as f64).ln())
            .sum::<f64>()
    };
    let n = x.len() as f64;
    let chi_square = 2.0 * n * std::f64::consts::LN_2 - 2.0 * (s(m) - s(m + 1));
    ApproximateEntropy {
        m,
        phi,
        ap_en,
        chi_square,
        p_value: igamc(2f64.powi(m as i32 - 1), (chi_square / 2.0).max(0.0)),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::{bits, PI100};

    /// statistics.md 2.11, SE-1 (SP 800-22 section 2.11.4, from memory; R).
    #[test]
    fn section_2_11_serial_se1() {
        let x = bits("0011011101");
        assert_eq!(cyclic_counts(&x, 3), vec![0, 1, 1, 2, 1, 2, 2, 1]);
        assert_eq!(cyclic_counts(&x, 2), vec![1, 3, 3, 3]);
        assert_eq!(cyclic_counts(&x, 1), vec![4, 6]);
        let r = serial(&x, 3);
        assert!((r.psi[0] - 2.8).abs() < 1e-12);
        assert!((r.psi[1] - 1.2).abs() < 1e-12);
        assert!((r.psi[2] - 0.4).abs() < 1e-12);
        assert!((r.del1 - 1.6).abs() < 1e-12);
        assert!((r.del2 - 0.8).abs() < 1e-12);
        assert!((r.p_value1 - 0.808792).abs() <= 5e-7);
        assert!((r.p_value2 - 0.670320).abs() <= 5e-7);
    }

    /// statistics.md 2.12, AE-1 and AE-2 (SP 800-22 sections 2.12.4 and
    /// 2.12.8, from memory; R).
    #[test]
    fn section_2_12_approximate_entropy() {
        let r = approximate_entropy(&bits("0100110101"), 3);
        assert!((r.phi[0] + 1.643418).abs() <= 5e-7);
        assert!((r.phi[1] + 1.834372).abs() <= 5e-7);
        assert!((r.ap_en - 0.190954).abs() <= 5e-7);
        assert!((r.chi_square - 10.043859).abs() <= 5e-7);
        assert!((r.p_value - 0.261961).abs() <= 5e-7);
        let r = approximate_entropy(&bits(PI100), 2);
        assert!((r.ap_en - 0.665393).abs() <= 5e-7);
        assert!((r.chi_square - 5.550792).abs() <= 5e-7);
        assert!((r.p_value - 0.235301).abs() <= 5e-7);
    }
}

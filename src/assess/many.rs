//! Many sequences: proportion of passing sequences and uniformity of the
//! P-values (SP 800-22 section 4.2; statistics.md section 4).

use crate::assess::special::igamc;
use serde::Serialize;

/// Acceptable range of the pass proportion for `m` sequences tested at
/// level `alpha`: p̂ ± 3√(p̂(1 − p̂)/m) with p̂ = 1 − α (SP 800-22 section
/// 4.2.1; statistics.md 4). Returns (low, high); high may exceed 1.
pub fn proportion_interval(alpha: f64, m: usize) -> (f64, f64) {
    let p = 1.0 - alpha;
    let h = 3.0 * (p * (1.0 - p) / m as f64).sqrt();
    (p - h, p + h)
}

/// P-value_T below which the P-values are deemed non-uniform (SP 800-22
/// section 4.2.2; statistics.md 4).
pub const UNIFORMITY_THRESHOLD: f64 = 0.0001;

/// Fewest sequences for the uniformity check (SP 800-22 section 4.2.2,
/// from memory; statistics.md 4).
pub const MIN_SEQUENCES_FOR_UNIFORMITY: usize = 55;

/// Bin counts F_1 … F_10 of P-values over [k/10, (k+1)/10), with P = 1 in
/// the last bin (the convention statistics.md 4 fixes).
pub fn bin_counts(p_values: &[f64]) -> [u64; 10] {
    let mut f = [0u64; 10];
    for &p in p_values {
        let k = ((p * 10.0).floor() as i64).clamp(0, 9) as usize;
        f[k] += 1;
    }
    f
}

/// χ² = Σ (F_i − s/10)²/(s/10) and P-value_T = igamc(9/2, χ²/2) from the
/// bin counts (SP 800-22 section 4.2.2; statistics.md 4).
pub fn uniformity(f: &[u64; 10]) -> (f64, f64) {
    let s: u64 = f.iter().sum();
    let e = s as f64 / 10.0;
    let chi = f.iter().map(|&x| (x as f64 - e).powi(2) / e).sum::<f64>();
    (chi, igamc(4.5, chi / 2.0))
}

/// Summary of one P-value kind over many sequences.
#[derive(Clone, Debug, Serialize)]
pub struct Summary {
    /// Sequences with a P-value (the test was applicable).
    pub sequences: usize,
    /// Sequences with P ≥ α.
    pub passed: usize,
    /// passed / sequences.
    pub proportion: f64,
    /// Acceptable range of the proportion.
    pub interval: (f64, f64),
    /// Whether the proportion is inside the range.
    pub proportion_ok: bool,
    /// Bin counts F_1 … F_10.
    pub bins: [u64; 10],
    /// Uniformity χ² and P-value_T, when there are enough sequences.
    pub uniformity: Option<(f64, f64)>,
    /// Whether the P-values look uniform (`None`: too few sequences).
    pub uniform_ok: Option<bool>,
}

/// Summarises the P-values of one test over many sequences at level
/// `alpha` (SP 800-22 section 4.2).
///
/// # Panics
/// If `p_values` is empty.
pub fn summarise(p_values: &[f64], alpha: f64) -> Summary {
    assert!(!p_values.is_empty(), "no P-values to summarise");
    let m = p_values.len();
    let passed = p_values.iter().filter(|&&p| p >= alpha).count();
    let proportion = passed as f64 / m as f64;
    let interval = proportion_interval(alpha, m);
    let bins = bin_counts(p_values);
    let uni = (m >= MIN_SEQUENCES_FOR_UNIFORMITY).then(|| uniformity(&bins));
    Summary {
        sequences: m,
        passed,
        proportion,
        interval,
        proportion_ok: proportion >= interval.0 && proportion <= interval.1,
        bins,
        uniformity: uni,
        uniform_ok: uni.map(|(_, p)| p >= UNIFORMITY_THRESHOLD),
    }
}

/// Probability that one P-value kind of `m` independent sequences with
/// uniform P-values falls outside the proportion range of
/// [`proportion_interval`]: Σ P[Bin(m, α) = f] over the failure counts f
/// with (m − f)/m outside the range. The 3-sigma band is coarse for small
/// m (m = 100: four failures already fall outside, probability 0.018), so
/// this is the figure to compare the number of flagged kinds with.
pub fn chance_outside_interval(alpha: f64, m: usize) -> f64 {
    let (lo, hi) = proportion_interval(alpha, m);
    let mut total = 0.0;
    // pmf by the recurrence pmf(f+1) = pmf(f)·(m−f)/(f+1)·α/(1−α)
    let mut pmf = (1.0 - alpha).powi(m as i32);
    for f in 0..=m {
        let prop = (m - f) as f64 / m as f64;
        if prop < lo || prop > hi {
            total += pmf;
        }
        pmf *= (m - f) as f64 / (f + 1) as f64 * alpha / (1.0 - alpha);
    }
    total
}

#[cfg(test)]
mod tests {
    use super::*;

    /// statistics.md 4, proportion rows (SP 800-22 section 4.2.1, from
    /// memory; R for m = 1000, C for m = 100).
    #[test]
    fn section_4_proportion_interval() {
        let (lo, hi) = proportion_interval(0.01, 1000);
        assert!((lo - 0.9805607).abs() < 5e-8 && (hi - 0.9994393).abs() < 5e-8);
        let (lo, hi) = proportion_interval(0.01, 100);
        assert!((lo - 0.9601504).abs() < 5e-8 && (hi - 1.0198496).abs() < 5e-8);
        // the text's example: 996 of 1000 passing is inside
        let mut p = vec![0.5; 996];
        p.extend([0.001; 4]);
        let s = summarise(&p, 0.01);
        assert!((s.proportion - 0.996).abs() < 1e-12 && s.proportion_ok);
    }

    /// Binomial tail of the band, against values computed with Python's
    /// exact `math.comb` sums while writing this test: m = 100 gives
    /// P[F >= 4] = 0.01837403644; m = 1000 gives 0.00333153104 (F >= 20, and
    /// F = 0, whose proportion 1 lies above the upper end 0.9994393).
    #[test]
    fn chance_outside_band() {
        assert!((chance_outside_interval(0.01, 100) - 0.01837403644464964).abs() < 1e-12);
        assert!((chance_outside_interval(0.01, 1000) - 0.0033315310351380977).abs() < 1e-12);
    }

    /// statistics.md 4, uniformity examples (status C).
    #[test]
    fn section_4_uniformity_examples() {
        let (c, p) = uniformity(&[10; 10]);
        assert_eq!(c, 0.0);
        assert_eq!(p, 1.0);
        let (c, p) = uniformity(&[15, 5, 10, 10, 10, 10, 10, 10, 10, 10]);
        assert!((c - 5.0).abs() < 1e-12 && (p - 0.8343082602).abs() < 1e-9);
        let (c, p) = uniformity(&[130, 70, 100, 100, 100, 100, 100, 100, 100, 100]);
        assert!((c - 18.0).abs() < 1e-12 && (p - 0.03517353947).abs() < 1e-10);
        let (c, p) = uniformity(&[100, 0, 0, 0, 0, 0, 0, 0, 0, 0]);
        assert!((c - 900.0).abs() < 1e-12);
        assert!((p / 6.1868e-188 - 1.0).abs() < 1e-4, "{p:e}");
        assert!(p < UNIFORMITY_THRESHOLD);
        // χ² at which P-value_T = 0.0001 (statistics.md 4: 33.719948)
        assert!((igamc(4.5, 33.719948 / 2.0) - 1e-4).abs() < 1e-10);
    }

    /// statistics.md 4: bins are [k/10, (k+1)/10), P = 1 in the last bin.
    #[test]
    fn section_4_bin_edges() {
        assert_eq!(
            bin_counts(&[0.0, 0.1, 0.0999, 0.9, 1.0]),
            [2, 1, 0, 0, 0, 0, 0, 0, 0, 2]
        );
    }
}

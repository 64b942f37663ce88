//! Longest run of ones in a block, SP 800-22 section 2.4 (statistics.md 2.4
//! and 3.1).

use crate::assess::special::igamc;
use serde::Serialize;

/// Which class probabilities to use.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ClassTable {
    /// The 4-decimal tables printed in SP 800-22 section 3.4 (statistics.md
    /// 3.1). The published P-values (Appendix B) depend on them, so they are
    /// the default.
    #[default]
    Printed,
    /// Exact class probabilities (statistics.md 3.1, "exact" column).
    Exact,
}

/// Block length M, class bounds and probabilities for one of the three
/// configurations of SP 800-22 section 2.4.2 (statistics.md 2.4).
#[derive(Clone, Copy, Debug)]
pub struct Config {
    /// Block length M.
    pub m: usize,
    /// Longest-run value of the first class (runs at most this go there).
    pub first: u32,
    /// Number of classes K + 1.
    pub classes: usize,
    /// Printed class probabilities (statistics.md 3.1).
    pub printed: &'static [f64],
    /// Exact class probabilities (statistics.md 3.1).
    pub exact: &'static [f64],
}

/// M = 8, K = 3 (n ≥ 128).
pub const M8: Config = Config {
    m: 8,
    first: 1,
    classes: 4,
    printed: &[0.2148, 0.3672, 0.2305, 0.1875],
    exact: &[55.0 / 256.0, 47.0 / 128.0, 59.0 / 256.0, 3.0 / 16.0],
};

/// M = 128, K = 5 (n ≥ 6,272). The printed π_2 = 0.2493 is kept as printed
/// (statistics.md section 6 item 2: the exact value rounds to 0.2494).
pub const M128: Config = Config {
    m: 128,
    first: 4,
    classes: 6,
    printed: &[0.1174, 0.2430, 0.2493, 0.1752, 0.1027, 0.1124],
    exact: &[
        0.1174035788,
        0.2429559593,
        0.2493634832,
        0.1751770603,
        0.1027010713,
        0.1123988471,
    ],
};

/// M = 10^4, K = 6 (n ≥ 750,000). The printed table is an approximation
/// (statistics.md 3.1 and section 6 item 2) but the published results use it.
pub const M10000: Config = Config {
    m: 10_000,
    first: 10,
    classes: 7,
    printed: &[0.0882, 0.2092, 0.2483, 0.1933, 0.1208, 0.0675, 0.0727],
    exact: &[
        0.08663231108,
        0.2082006484,
        0.2484185819,
        0.1939127867,
        0.1214584851,
        0.06801108930,
        0.07336609746,
    ],
};

/// The configuration SP 800-22 section 2.4.2 prescribes for n bits, or
/// `None` below 128 bits (statistics.md 2.4).
pub fn config_for(n: usize) -> Option<Config> {
    if n >= 750_000 {
        Some(M10000)
    } else if n >= 6_272 {
        Some(M128)
    } else if n >= 128 {
        Some(M8)
    } else {
        None
    }
}

/// Result of the longest-run test.
#[derive(Clone, Debug, Serialize)]
pub struct LongestRun {
    /// Block length M.
    pub m: usize,
    /// Class counts ν_0 … ν_K.
    pub nu: Vec<u64>,
    /// χ².
    pub chi_square: f64,
    /// P = igamc(K/2, χ²/2).
    pub p_value: f64,
}

/// Longest run of ones in a block (SP 800-22 section 2.4; statistics.md
/// 2.4) with configuration `cfg` and class table `table`.
///
/// # Panics
/// If `x` holds fewer than `cfg.m` bits.
pub fn longest_run(x: &[u8], cfg: &Config, table: ClassTable) -> LongestRun {
    assert!(
        x.len() >= cfg.m,
        "longest run: {} bits for blocks of {}",
        x.len(),
        cfg.m
    );
    let n_blocks = x.len() / cfg.m;
    let mut nu = vec![0u64; cfg.classes];
    for blk in x.chunks_exact(cfg.m) {
        let mut best = 0u32;
        let mut cur = 0u32;
        for &b in blk {
            if b == 1 {
                cur += 1;
                best = best.max(cur);
            } else {
                cur = 0;
            }
        }
        let class = (best.max(cfg.first) - cfg.first).min(cfg.classes as u32 - 1);
        nu[class as usize] += 1;
    }
    let pis = match table {
        ClassTable::Printed => cfg.printed,
        ClassTable::Exact => cfg.exact,
    };
    let nf = n_blocks as f64;
    let chi_square = nu
        .iter()
        .zip(pis)
        .map(|(&v, &p)| (v as f64 - nf * p).powi(2) / (nf * p))
        .sum::<f64>();
    let k = (cfg.classes - 1) as f64;
    LongestRun {
        m: cfg.m,
        nu,
        chi_square,
        p_value: igamc(k / 2.0, chi_square / 2.0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::{bits, LR128};

    /// statistics.md 2.4, LR-1 (SP 800-22 section 2.4.4, from memory; R,
    /// with the printed 4-decimal table).
    #[test]
    fn section_2_4_longest_run_lr1_printed_table() {
        let r = longest_run(&bits(LR128), &M8, ClassTable::Printed);
        assert_eq!(r.nu, vec![4, 9, 3, 0]);
        assert!((r.chi_square - 4.882605).abs() <= 5e-7);
        assert!((r.p_value - 0.180598).abs() <= 5e-7);
    }

    /// statistics.md 2.4, LR-2 (SP 800-22 section 2.4.8, from memory; R*:
    /// the printed P = 0.180609 needs the exact class probabilities, see
    /// statistics.md section 6 item 1).
    #[test]
    fn section_2_4_longest_run_lr2_exact_table() {
        let r = longest_run(&bits(LR128), &M8, ClassTable::Exact);
        assert!((r.chi_square - 4.882457463).abs() <= 1e-8);
        assert!((r.p_value - 0.180609).abs() <= 5e-7);
    }

    /// statistics.md 3.1: the exact tables sum to 1 and the printed ones are
    /// their 4-decimal roundings, except the two entries section 6 item 2
    /// names (M = 128 π_2, and the approximate M = 10^4 table).
    #[test]
    fn section_3_1_class_tables() {
        for cfg in [M8, M128, M10000] {
            let s: f64 = cfg.exact.iter().sum();
            assert!((s - 1.0).abs() < 1e-9, "M = {}: exact sum {s}", cfg.m);
        }
        for cfg in [M8, M128] {
            for (i, (&p, &e)) in cfg.printed.iter().zip(cfg.exact).enumerate() {
                let off = (p - e).abs();
                if cfg.m == 128 && i == 2 {
                    assert!(off > 5e-5 && off < 1e-4);
                } else {
                    assert!(off <= 5e-5 + 1e-12, "M = {} class {i}", cfg.m);
                }
            }
        }
        let worst = M10000
            .printed
            .iter()
            .zip(M10000.exact)
            .map(|(p, e)| (p - e).abs())
            .fold(0.0, f64::max);
        assert!(worst > 1.5e-3 && worst < 1.7e-3, "{worst}");
    }

    /// Common practice: exact class probabilities of the longest run of ones
    /// in 8 random bits, by enumerating all 256 blocks; this checks the
    /// class mapping against statistics.md 3.1 (M = 8 exact).
    #[test]
    fn section_3_1_m8_by_enumeration() {
        let mut counts = [0u32; 4];
        for v in 0u32..256 {
            let blk: Vec<u8> = (0..8).map(|i| ((v >> i) & 1) as u8).collect();
            let r = longest_run(&blk, &M8, ClassTable::Exact);
            let c = r.nu.iter().position(|&x| x == 1).unwrap();
            counts[c] += 1;
        }
        for (c, e) in counts.iter().zip(M8.exact) {
            assert!((*c as f64 / 256.0 - e).abs() < 1e-15);
        }
    }
}

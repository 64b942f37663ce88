//! Template matching tests: non-overlapping (SP 800-22 section 2.7) and
//! overlapping (section 2.8). Formulas: statistics.md 2.7, 2.8, 3.4, 3.7.

use crate::assess::special::igamc;
use serde::Serialize;

/// A template as its bits b_1 … b_m (first bit first).
#[derive(Clone, Debug, PartialEq, Eq, Serialize)]
pub struct Template(pub Vec<u8>);

impl Template {
    /// Parses '0'/'1' text.
    pub fn parse(s: &str) -> Option<Template> {
        s.bytes()
            .map(|c| match c {
                b'0' => Some(0),
                b'1' => Some(1),
                _ => None,
            })
            .collect::<Option<Vec<u8>>>()
            .map(Template)
    }

    /// Length m.
    pub fn len(&self) -> usize {
        self.0.len()
    }

    /// Whether the template is empty.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// Window value with b_1 as the most significant bit.
    fn value(&self) -> usize {
        self.0.iter().fold(0, |acc, &b| acc << 1 | b as usize)
    }

    /// The template as '0'/'1' text.
    pub fn to_text(&self) -> String {
        self.0.iter().map(|&b| (b'0' + b) as char).collect()
    }
}

/// All aperiodic templates of length `m`, in increasing numeric order (b_1
/// most significant): the words with no proper prefix equal to a suffix
/// (no border), so that two occurrences cannot overlap. Common practice:
/// these are the unbordered binary words, of which there are 148 for
/// m = 9 and 284 for m = 10 (OEIS A003000, from memory); SP 800-22 section
/// 2.7 runs the test on each of them.
pub fn aperiodic_templates(m: usize) -> Vec<Template> {
    assert!((1..=20).contains(&m), "template length {m}");
    (0u32..1 << m)
        .filter_map(|v| {
            let bits: Vec<u8> = (0..m).map(|i| ((v >> (m - 1 - i)) & 1) as u8).collect();
            let bordered = (1..m).any(|k| bits[k..] == bits[..m - k]);
            (!bordered).then_some(Template(bits))
        })
        .collect()
}

/// Result of the non-overlapping template test for one template.
#[derive(Clone, Debug, Serialize)]
pub struct NonOverlapping {
    /// The template B.
    pub template: String,
    /// Matches per block W_1 … W_N.
    pub w: Vec<u64>,
    /// μ = (M − m + 1)/2^m.
    pub mu: f64,
    /// σ² = M (1/2^m − (2m − 1)/2^(2m)).
    pub sigma2: f64,
    /// χ² = Σ (W_j − μ)²/σ².
    pub chi_square: f64,
    /// P = igamc(N/2, χ²/2).
    pub p_value: f64,
}

/// χ² and P-value from the block counts (SP 800-22 section 2.7.4 steps
/// 3-5; statistics.md 2.7 and 3.7).
pub fn non_overlapping_from_counts(
    template: &Template,
    block_len: usize,
    w: Vec<u64>,
) -> NonOverlapping {
    let m = template.len() as i32;
    let mf = block_len as f64;
    let mu = (mf - m as f64 + 1.0) / 2f64.powi(m);
    let sigma2 = mf * (1.0 / 2f64.powi(m) - (2.0 * m as f64 - 1.0) / 2f64.powi(2 * m));
    let chi_square = w
        .iter()
        .map(|&x| (x as f64 - mu).powi(2) / sigma2)
        .sum::<f64>();
    let n = w.len() as f64;
    NonOverlapping {
        template: template.to_text(),
        w,
        mu,
        sigma2,
        chi_square,
        p_value: igamc(n / 2.0, chi_square / 2.0),
    }
}

/// Slow, obviously correct count of non-overlapping matches in one block:
/// the window jumps m bits after a hit and 1 bit otherwise.
pub fn count_non_overlapping_naive(block: &[u8], t: &Template) -> u64 {
    let m = t.len();
    let mut i = 0;
    let mut w = 0;
    while i + m <= block.len() {
        if block[i..i + m] == t.0[..] {
            w += 1;
            i += m;
        } else {
            i += 1;
        }
    }
    w
}

/// Non-overlapping template test for one template on N blocks of
/// M = ⌊n/N⌋ bits (SP 800-22 section 2.7; statistics.md 2.7), slow path.
///
/// # Panics
/// If the blocks are shorter than the template.
pub fn non_overlapping(x: &[u8], t: &Template, blocks: usize) -> NonOverlapping {
    let m_len = x.len() / blocks;
    assert!(
        m_len >= t.len(),
        "blocks of {m_len} bits for a {}-bit template",
        t.len()
    );
    let w = (0..blocks)
        .map(|j| count_non_overlapping_naive(&x[j * m_len..(j + 1) * m_len], t))
        .collect();
    non_overlapping_from_counts(t, m_len, w)
}

/// Non-overlapping template test for many templates of one length at once
/// (fast path, same result as [`non_overlapping`] per template): per block,
/// the positions of each m-bit window value are bucketed once, then each
/// template's matches are counted greedily from its own bucket.
///
/// # Panics
/// If the templates differ in length or the blocks are shorter than them.
pub fn non_overlapping_many(
    x: &[u8],
    templates: &[Template],
    blocks: usize,
) -> Vec<NonOverlapping> {
    let Some(first) = templates.first() else {
        return Vec::new();
    };
    let m = first.len();
    assert!(
        templates.iter().all(|t| t.len() == m),
        "templates of mixed lengths"
    );
    let m_len = x.len() / blocks;
    assert!(m_len >= m, "blocks of {m_len} bits for a {m}-bit template");
    let size = 1usize << m;
    let mask = size - 1;
    let mut counts = vec![vec![0u64; blocks]; templates.len()];
    let windows = m_len - m + 1;
    let mut start = vec![0u32; size + 1];
    let mut pos = vec![0u32; windows];
    let mut vals = vec![0u32; windows];
    for j in 0..blocks {
        let blk = &x[j * m_len..(j + 1) * m_len];
        // window values, b_1 most significant
        let mut v = 0usize;
        for (i, &b) in blk.iter().enumerate() {
            v = (v << 1 | b as usize) & mask;
            if i + 1 >= m {
                vals[i + 1 - m] = v as u32;
            }
        }
        // counting sort of positions by window value
        start.fill(0);
        for &v in &vals {
            start[v as usize + 1] += 1;
        }
        for k in 0..size {
            start[k + 1] += start[k];
        }
        let mut fill = start.clone();
        for (i, &v) in vals.iter().enumerate() {
            pos[fill[v as usize] as usize] = i as u32;
            fill[v as usize] += 1;
        }
        for (ti, t) in templates.iter().enumerate() {
            let v = t.value();
            let mut next = 0u32;
            let mut w = 0u64;
            for &p in &pos[start[v] as usize..start[v + 1] as usize] {
                if p >= next {
                    w += 1;
                    next = p + m as u32;
                }
            }
            counts[ti][j] = w;
        }
    }
    templates
        .iter()
        .zip(counts)
        .map(|(t, w)| non_overlapping_from_counts(t, m_len, w))
        .collect()
}

/// Which class probabilities the overlapping test uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum OverlapTable {
    /// The η formulas of SP 800-22 section 3.8 at η = λ/2 (statistics.md
    /// 3.4). For m = 9, M = 1032 this is η = 1, which is what section 2.8.8
    /// and Appendix B used (statistics.md section 6 item 7): the default.
    #[default]
    EtaFormula,
    /// The exact values for m = 9, M = 1032 quoted in Rev. 1a
    /// (0.364091, …; statistics.md 3.4).
    Exact9x1032,
}

/// Exact class probabilities for m = 9, M = 1032 (statistics.md 3.4).
pub const EXACT_9_1032: [f64; 6] = [0.364091, 0.185659, 0.139381, 0.100571, 0.070432, 0.139865];

/// Class probabilities π_0 … π_5 from the η formulas (SP 800-22 section
/// 3.8; statistics.md 3.4), π_5 = 1 − Σ.
pub fn eta_probabilities(eta: f64) -> [f64; 6] {
    let e = (-eta).exp();
    let p0 = e;
    let p1 = eta / 2.0 * e;
    let p2 = eta * e / 8.0 * (eta + 2.0);
    let p3 = eta * e / 8.0 * (eta * eta / 6.0 + eta + 1.0);
    let p4 = eta * e / 16.0 * (eta.powi(3) / 24.0 + eta * eta / 2.0 + 3.0 * eta / 2.0 + 1.0);
    [p0, p1, p2, p3, p4, 1.0 - (p0 + p1 + p2 + p3 + p4)]
}

/// Result of the overlapping template test.
#[derive(Clone, Debug, Serialize)]
pub struct Overlapping {
    /// Blocks N.
    pub blocks: usize,
    /// Class counts ν_0 … ν_5.
    pub nu: [u64; 6],
    /// Class probabilities used.
    pub pi: [f64; 6],
    /// χ².
    pub chi_square: f64,
    /// P = igamc(5/2, χ²/2).
    pub p_value: f64,
}

/// χ² and P-value from the class counts (SP 800-22 section 2.8.4 steps
/// 4-5; statistics.md 2.8).
pub fn overlapping_from_counts(nu: [u64; 6], pi: [f64; 6]) -> Overlapping {
    let n: u64 = nu.iter().sum();
    let nf = n as f64;
    let chi_square = nu
        .iter()
        .zip(pi)
        .map(|(&v, p)| (v as f64 - nf * p).powi(2) / (nf * p))
        .sum::<f64>();
    Overlapping {
        blocks: n as usize,
        nu,
        pi,
        chi_square,
        p_value: igamc(2.5, chi_square / 2.0),
    }
}

/// Overlapping template test (SP 800-22 section 2.8; statistics.md 2.8)
/// with template `t`, blocks of `block_len` bits.
///
/// # Panics
/// If the blocks are shorter than the template or `x` is shorter than one
/// block, or `Exact9x1032` is asked for other parameters.
pub fn overlapping(x: &[u8], t: &Template, block_len: usize, table: OverlapTable) -> Overlapping {
    let m = t.len();
    assert!(
        block_len >= m && x.len() >= block_len,
        "overlapping: bad sizes"
    );
    let mut nu = [0u64; 6];
    let mask = (1usize << m) - 1;
    let tv = t.value();
    for blk in x.chunks_exact(block_len) {
        let mut v = 0usize;
        let mut hits = 0usize;
        for (i, &b) in blk.iter().enumerate() {
            v = (v << 1 | b as usize) & mask;
            if i + 1 >= m && v == tv {
                hits += 1;
            }
        }
        nu[hits.min(5)] += 1;
    }
    let pi = match table {
        OverlapTable::EtaFormula => {
            let lambda = (block_len - m + 1) as f64 / 2f64.powi(m as i32);
            eta_probabilities(lambda / 2.0)
        }
        OverlapTable::Exact9x1032 => {
            assert!(
                m == 9 && block_len == 1032,
                "exact table is for m = 9, M = 1032"
            );
            EXACT_9_1032
        }
    };
    overlapping_from_counts(nu, pi)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::bits;
    use proptest::prelude::*;

    /// statistics.md 2.7, NT-1 (SP 800-22 section 2.7.4, from memory; R).
    #[test]
    fn section_2_7_non_overlapping_nt1() {
        let t = Template::parse("001").unwrap();
        let r = non_overlapping(&bits("10100100101110010110"), &t, 2);
        assert_eq!(r.w, vec![2, 1]);
        assert!((r.mu - 1.0).abs() < 1e-15);
        assert!((r.sigma2 - 0.46875).abs() < 1e-15);
        assert!((r.chi_square - 2.133333).abs() <= 5e-7);
        assert!((r.p_value - 0.344154).abs() <= 5e-7);
    }

    /// statistics.md 2.7, NT-2 (SP 800-22 section 2.7.8, from memory), from
    /// the printed W_j (the input bits are not reproducible here). σ² is
    /// 247.5 exactly (statistics.md section 6 item 5).
    #[test]
    fn section_2_7_non_overlapping_nt2_from_counts() {
        let t = Template::parse("000000001").unwrap();
        let r =
            non_overlapping_from_counts(&t, 131072, vec![259, 229, 271, 245, 272, 262, 259, 246]);
        assert!((r.mu - 255.984375).abs() < 1e-12);
        assert!((r.sigma2 - 247.5).abs() < 1e-12);
        assert!((r.chi_square - 5.999377).abs() <= 5e-7);
        assert!((r.p_value - 0.647302).abs() <= 5e-7);
    }

    /// Common practice (OEIS A003000, from memory): 148 aperiodic templates
    /// of length 9, 284 of length 10; `000000001` is the first of length 9.
    #[test]
    fn aperiodic_template_counts() {
        let t9 = aperiodic_templates(9);
        assert_eq!(t9.len(), 148);
        assert_eq!(t9[0].to_text(), "000000001");
        assert_eq!(aperiodic_templates(10).len(), 284);
        assert_eq!(aperiodic_templates(2).len(), 2);
    }

    /// statistics.md 2.8, OT-1 (SP 800-22 section 2.8.4, low confidence; X).
    /// The remembered printed ν do not match the remembered input
    /// (statistics.md section 6 item 6), so we test the recomputed counts
    /// and values, and the arithmetic row OT-1' from the printed ν.
    #[test]
    fn section_2_8_overlapping_ot1_recomputed() {
        let x = bits("10111011110010110100011100101110111110000101101001");
        let t = Template::parse("11").unwrap();
        let r = overlapping(&x, &t, 10, OverlapTable::EtaFormula);
        assert_eq!(r.nu, [0, 2, 0, 1, 1, 1]);
        // The recomputed χ² = 5.051457514, P = 0.4096326024 of
        // statistics.md use the printed 6-decimal π (the unrounded η
        // formulas give χ² = 5.05144, a 2e-5 difference).
        let pi = [0.324652, 0.182617, 0.142670, 0.106645, 0.077147, 0.166269];
        assert!((r.chi_square - 5.051457514).abs() < 5e-5);
        let r = overlapping_from_counts(r.nu, pi);
        assert!((r.chi_square - 5.051457514).abs() < 1e-8);
        assert!((r.p_value - 0.4096326024).abs() < 1e-9);
        // OT-1': printed ν with the printed (rounded) π.
        let r = overlapping_from_counts([0, 1, 1, 1, 1, 1], pi);
        assert!((r.chi_square - 3.167729).abs() <= 5e-7);
        assert!((r.p_value - 0.6741449726).abs() < 1e-6);
    }

    /// statistics.md 3.4: η formulas at η = 1.125 and η = 1.
    #[test]
    fn section_3_4_eta_probabilities() {
        let want = [
            0.3246524674,
            0.1826170129,
            0.1426695413,
            0.1066454821,
            0.07714743986,
            0.1662680564,
        ];
        for (a, b) in eta_probabilities(1.125).iter().zip(want) {
            assert!((a - b).abs() < 1e-9);
        }
        let want = [
            0.3678794412,
            0.1839397206,
            0.1379547904,
            0.0996340153,
            0.0699354146,
            0.1406566179,
        ];
        for (a, b) in eta_probabilities(1.0).iter().zip(want) {
            assert!((a - b).abs() < 1e-9);
        }
    }

    proptest! {
        /// The bucketed fast path equals the naive scan on random inputs.
        #[test]
        fn many_templates_match_naive(bits in proptest::collection::vec(0u8..2, 40..600), blocks in 1usize..5, m in 2usize..6) {
            let templates = aperiodic_templates(m);
            prop_assume!(bits.len() / blocks >= m);
            let fast = non_overlapping_many(&bits, &templates, blocks);
            for (t, f) in templates.iter().zip(fast) {
                let slow = non_overlapping(&bits, t, blocks);
                prop_assert_eq!(&f.w, &slow.w);
            }
        }
    }
}

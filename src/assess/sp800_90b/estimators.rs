//! Min-entropy estimators of SP 800-90B section 6.3 for binary samples.
//!
//! Provenance: statistics.md 5.2 records one checked worked example (the
//! most common value estimate, MCV-1) and says the text of the other
//! estimators could not be read when it was compiled. The definitions of
//! the collision (6.3.2), Markov (6.3.3), compression (6.3.4), t-tuple
//! (6.3.5) and longest repeated substring (6.3.6) estimates below are
//! written **from memory** of SP 800-90B (January 2018); every constant
//! taken from it is named where it is used. Where a definition could be
//! derived from first principles, a test checks it that way (the collision
//! and compression expectations, the Markov path probabilities).
//!
//! Left out (their constants and procedures could not be pinned down from
//! a checked copy of the standard): the prediction estimators MultiMCW
//! (6.3.7), lag (6.3.8), MultiMMC (6.3.9) and LZ78Y (6.3.10). See
//! [`LEFT_OUT`].

use serde::Serialize;

/// z value of the 99% upper confidence bound used throughout SP 800-90B
/// section 6.3 (2.576; statistics.md 5.2, MCV rule).
pub const Z99: f64 = 2.576;

/// Estimators of SP 800-90B section 6.3 not implemented, with the reason.
pub const LEFT_OUT: [(&str, &str); 4] = [
    (
        "multi most common in window prediction (6.3.7)",
        "definition not pinned down from a checked copy of SP 800-90B",
    ),
    (
        "lag prediction (6.3.8)",
        "definition not pinned down from a checked copy of SP 800-90B",
    ),
    (
        "multi Markov model with counting prediction (6.3.9)",
        "definition not pinned down from a checked copy of SP 800-90B",
    ),
    (
        "LZ78Y prediction (6.3.10)",
        "definition not pinned down from a checked copy of SP 800-90B",
    ),
];

/// One estimator's result.
#[derive(Clone, Debug, Serialize)]
pub struct Estimate {
    /// Name and section.
    pub name: &'static str,
    /// Min-entropy per sample (bits), or `None` if the estimator does not
    /// apply to this data (then `note` says why).
    pub min_entropy: Option<f64>,
    /// Key intermediate value (p_u, p_max, ...), for the report.
    pub detail: String,
    /// Why the estimate is missing, or a remark.
    pub note: Option<String>,
}

/// Most common value estimate (SP 800-90B section 6.3.1; statistics.md
/// 5.2): p̂ = max count / L, p_u = min(1, p̂ + 2.576 √(p̂(1 − p̂)/(L − 1))),
/// H = −log2(p_u). Returns (p̂, p_u, H). Works on any sample alphabet.
///
/// # Panics
/// If fewer than 2 samples are given.
pub fn most_common_value<T: Ord + Copy>(samples: &[T]) -> (f64, f64, f64) {
    assert!(samples.len() >= 2, "MCV needs at least 2 samples");
    let mut v = samples.to_vec();
    v.sort_unstable();
    let mut best = 0usize;
    let mut i = 0;
    while i < v.len() {
        let j = v[i..]
            .iter()
            .position(|x| *x != v[i])
            .map_or(v.len(), |k| i + k);
        best = best.max(j - i);
        i = j;
    }
    let l = samples.len() as f64;
    let p = best as f64 / l;
    let pu = (p + Z99 * (p * (1.0 - p) / (l - 1.0)).sqrt()).min(1.0);
    (p, pu, -pu.log2())
}

/// Collision estimate for binary samples (SP 800-90B section 6.3.2, from
/// memory). Walk the data: from the current index, find the first sample
/// that repeats an earlier sample of the current stretch; its length t
/// (2 or 3 for binary data) is recorded and the walk restarts after it.
/// X̄ = mean t, σ̂ = sample standard deviation, X̄' = X̄ − 2.576 σ̂/√v.
/// Solve X̄' = E[t](p) for p ∈ [1/2, 1]; for binary data
/// E[t] = 2 + 2p(1 − p) (the standard's closed form reduces to this; see
/// the test). H = −log2 p, or 1 if there is no solution.
pub fn collision(x: &[u8]) -> Estimate {
    let name = "collision (6.3.2)";
    let mut ts: Vec<f64> = Vec::new();
    let mut i = 0;
    while i + 1 < x.len() {
        if x[i] == x[i + 1] {
            ts.push(2.0);
            i += 2;
        } else if i + 2 < x.len() {
            ts.push(3.0);
            i += 3;
        } else {
            break;
        }
    }
    let v = ts.len();
    if v < 2 {
        return Estimate {
            name,
            min_entropy: None,
            detail: String::new(),
            note: Some(format!("{v} collisions found, at least 2 are needed")),
        };
    }
    let mean = ts.iter().sum::<f64>() / v as f64;
    let var = ts.iter().map(|t| (t - mean).powi(2)).sum::<f64>() / (v as f64 - 1.0);
    let xp = mean - Z99 * var.sqrt() / (v as f64).sqrt();
    // 2 + 2pq = X' with p >= 1/2: pq = (X' - 2)/2, p = 1/2 + sqrt(1/4 - pq)
    let pq = (xp - 2.0) / 2.0;
    let (p, note) = if !(0.0..=0.25).contains(&pq) {
        (
            0.5,
            Some("no solution in [1/2, 1]; the estimate is 1 bit".to_string()),
        )
    } else {
        (0.5 + (0.25 - pq).sqrt(), None)
    };
    Estimate {
        name,
        min_entropy: Some((-p.log2()).min(1.0)),
        detail: format!("mean collision time {mean:.6}, lower bound {xp:.6}, p = {p:.6}"),
        note,
    }
}

/// The standard's collision-time expression for binary data, written as
/// remembered from SP 800-90B 6.3.2 step 8: with q = 1 − p and
/// F(q) = Γ(3, 1/q) q³ e^(1/q),
/// p q^−2 (1 + ½(p^−1 − q^−1)) F(q) − p q^−1 ½(p^−1 − q^−1).
pub fn collision_expectation_as_printed(p: f64) -> f64 {
    let q = 1.0 - p;
    let z = 1.0 / q;
    // Γ(3, z) = 2 e^(−z) (1 + z + z²/2) (upper incomplete gamma, integer a)
    let f = 2.0 * (1.0 + z + z * z / 2.0) * q.powi(3);
    let h = 0.5 * (1.0 / p - 1.0 / q);
    p / (q * q) * (1.0 + h) * f - p / q * h
}

/// Markov estimate for binary samples (SP 800-90B section 6.3.3, from
/// memory): P_0, P_1 from the counts; transition probabilities from the
/// overlapping pairs; the most likely 128-sample sequence among the six
/// candidates 00…0, 0101…01, 0111…1, 1000…0, 1010…10, 11…1 gives p_max;
/// H = min(−log2(p_max)/128, 1). A transition probability whose
/// denominator is zero (no sample to leave from) is taken as 0: it can
/// only appear in a candidate whose probability is then 0.
pub fn markov(x: &[u8]) -> Estimate {
    let name = "Markov (6.3.3)";
    if x.len() < 2 {
        return Estimate {
            name,
            min_entropy: None,
            detail: String::new(),
            note: Some("needs at least 2 samples".into()),
        };
    }
    let l = x.len() as f64;
    let ones = x.iter().filter(|&&b| b == 1).count() as f64;
    let p1 = ones / l;
    let p0 = 1.0 - p1;
    let mut c = [[0f64; 2]; 2];
    for w in x.windows(2) {
        c[w[0] as usize][w[1] as usize] += 1.0;
    }
    let tr = |a: usize, b: usize| {
        let d = c[a][0] + c[a][1];
        if d == 0.0 {
            0.0
        } else {
            c[a][b] / d
        }
    };
    let (p00, p01, p10, p11) = (tr(0, 0), tr(0, 1), tr(1, 0), tr(1, 1));
    // log2 of the six path probabilities (log space: 128-fold products)
    let lg = |v: f64| if v > 0.0 { v.log2() } else { f64::NEG_INFINITY };
    let cands = [
        lg(p0) + 127.0 * lg(p00),
        lg(p0) + 64.0 * lg(p01) + 63.0 * lg(p10),
        lg(p0) + lg(p01) + 126.0 * lg(p11),
        lg(p1) + lg(p10) + 126.0 * lg(p00),
        lg(p1) + 64.0 * lg(p10) + 63.0 * lg(p01),
        lg(p1) + 127.0 * lg(p11),
    ];
    let best = cands.iter().cloned().fold(f64::NEG_INFINITY, f64::max);
    Estimate {
        name,
        min_entropy: Some((-best / 128.0).min(1.0)),
        detail: format!("log2 p_max = {best:.4} over 128 samples"),
        note: None,
    }
}

/// Compression estimate for binary samples (SP 800-90B section 6.3.4, from
/// memory): 6-bit blocks (b = 6), the first 1000 blocks initialise the
/// dictionary, D_i = distance to the previous occurrence (or i if none),
/// X̄ = mean log2 D_i, σ̂ = 0.5907 √(Σ (log2 D_i)²/(ν − 1) − X̄²),
/// X̄' = X̄ − 2.576 σ̂/√ν, then solve X̄' = G(p) + (2^6 − 1) G(q) with
/// q = (1 − p)/(2^6 − 1) for p ∈ [2^−6, 1], where
/// G(z) = (1/ν) Σ_{t=d+1}^{L} Σ_{u=1}^{t} log2(u) F(z, t, u),
/// F = z²(1 − z)^(u−1) for u < t and z(1 − z)^(t−1) for u = t.
/// H = −log2(p)/6, or 1 if there is no solution.
pub fn compression(x: &[u8]) -> Estimate {
    const B: usize = 6;
    const D: usize = 1000;
    const C: f64 = 0.5907;
    let name = "compression (6.3.4)";
    let nb = x.len() / B;
    if nb <= D + 1 {
        return Estimate {
            name,
            min_entropy: None,
            detail: String::new(),
            note: Some(format!(
                "needs more than {} samples ({} blocks of 6 after 1000 for the dictionary)",
                (D + 2) * B,
                2
            )),
        };
    }
    let val = |i: usize| {
        x[i * B..(i + 1) * B]
            .iter()
            .fold(0usize, |a, &b| a << 1 | b as usize)
    };
    let mut dict = [0usize; 1 << B];
    for i in 1..=D {
        dict[val(i - 1)] = i;
    }
    let nu = nb - D;
    let (mut s, mut s2) = (0.0, 0.0);
    for i in D + 1..=nb {
        let v = val(i - 1);
        let d = if dict[v] == 0 { i } else { i - dict[v] };
        dict[v] = i;
        let lg = (d as f64).log2();
        s += lg;
        s2 += lg * lg;
    }
    let mean = s / nu as f64;
    let sigma = C * (s2 / (nu as f64 - 1.0) - mean * mean).max(0.0).sqrt();
    let xp = mean - Z99 * sigma / (nu as f64).sqrt();
    let expect = |p: f64| {
        let q = (1.0 - p) / ((1 << B) as f64 - 1.0);
        compression_g(p, D, nb) + ((1 << B) as f64 - 1.0) * compression_g(q, D, nb)
    };
    let lo = 1.0 / (1 << B) as f64;
    let (p, note) = if expect(lo) < xp {
        (
            lo,
            Some("no solution in [2^-6, 1]; the estimate is 1 bit".to_string()),
        )
    } else {
        // expect() decreases in p on [2^-6, 1]
        let (mut a, mut b) = (lo, 1.0);
        for _ in 0..100 {
            let m = 0.5 * (a + b);
            if expect(m) > xp {
                a = m
            } else {
                b = m
            }
        }
        (0.5 * (a + b), None)
    };
    Estimate {
        name,
        min_entropy: Some((-p.log2() / B as f64).min(1.0)),
        detail: format!("mean log2 distance {mean:.6}, lower bound {xp:.6}, p = {p:.6}"),
        note,
    }
}

/// G(z) of the compression estimate in O(L): the inner sum over u < t is
/// carried from one t to the next.
pub fn compression_g(z: f64, d: usize, l: usize) -> f64 {
    let nu = (l - d) as f64;
    let omz = 1.0 - z;
    // inner(t) = Σ_{u=1}^{t-1} log2(u) z² (1-z)^(u-1); start at t = 1
    let mut inner = 0.0;
    let mut pw = 1.0; // (1-z)^(t-1)
    let mut total = 0.0;
    for t in 1..=l {
        if t > d {
            total += inner + (t as f64).log2() * z * pw;
        }
        // move to t+1: add u = t
        inner += (t as f64).log2() * z * z * pw;
        pw *= omz;
    }
    total / nu
}

/// Slow, literal G(z) (double sum), the oracle for [`compression_g`].
pub fn compression_g_naive(z: f64, d: usize, l: usize) -> f64 {
    let mut total = 0.0;
    for t in d + 1..=l {
        for u in 1..=t {
            let f = if u < t {
                z * z * (1.0 - z).powi(u as i32 - 1)
            } else {
                z * (1.0 - z).powi(t as i32 - 1)
            };
            total += (u as f64).log2() * f;
        }
    }
    total / (l - d) as f64
}

/// Tuple statistics of a bit string for every length W ≥ 1: the count of
/// the most common W-tuple and Σ_i C(C_i, 2) over the distinct W-tuples
/// (overlapping tuples, L − W + 1 of them), from a suffix array.
pub struct TupleStats {
    /// max_count[w] for w = 0 … (index 0 unused).
    pub max_count: Vec<u64>,
    /// pairs[w] = Σ C(C_i, 2) for tuples of length w.
    pub pairs: Vec<u128>,
}

/// Suffix array of a bit string by prefix doubling (ranks start from
/// 32-bit windows with the suffix length as tie-break).
pub fn suffix_array(x: &[u8]) -> Vec<u32> {
    let n = x.len();
    let mut rank: Vec<u64> = (0..n)
        .map(|i| {
            let mut w = 0u64;
            for k in 0..32 {
                w = w << 1 | if i + k < n { x[i + k] as u64 } else { 0 };
            }
            w << 6 | (n - i).min(32) as u64
        })
        .collect();
    let mut sa: Vec<u32> = (0..n as u32).collect();
    let mut k = 32usize;
    let mut tmp = vec![0u64; n];
    loop {
        // current key: (rank[i], rank[i+k] or 0 meaning "ended")
        let key = |i: usize, rank: &[u64]| -> (u64, u64) {
            (rank[i], if i + k < n { rank[i + k] + 1 } else { 0 })
        };
        sa.sort_unstable_by_key(|&i| key(i as usize, &rank));
        let mut r = 0u64;
        tmp[sa[0] as usize] = 0;
        for w in 1..n {
            if key(sa[w] as usize, &rank) != key(sa[w - 1] as usize, &rank) {
                r += 1;
            }
            tmp[sa[w] as usize] = r;
        }
        std::mem::swap(&mut rank, &mut tmp);
        if r as usize == n - 1 || k >= n {
            break;
        }
        k *= 2;
    }
    sa
}

/// Longest common prefix of adjacent suffixes (Kasai et al.): lcp[i] is
/// for sa[i − 1] and sa[i] (lcp[0] = 0).
pub fn lcp_array(x: &[u8], sa: &[u32]) -> Vec<u32> {
    let n = x.len();
    let mut rank = vec![0u32; n];
    for (i, &s) in sa.iter().enumerate() {
        rank[s as usize] = i as u32;
    }
    let mut lcp = vec![0u32; n];
    let mut h = 0usize;
    for i in 0..n {
        let r = rank[i] as usize;
        if r > 0 {
            let j = sa[r - 1] as usize;
            while i + h < n && j + h < n && x[i + h] == x[j + h] {
                h += 1;
            }
            lcp[r] = h as u32;
            h = h.saturating_sub(1);
        } else {
            h = 0;
        }
    }
    lcp
}

/// Tuple statistics from the LCP array: sweeping W downwards and joining
/// adjacent suffixes with lcp ≥ W (union–find) gives the groups of equal
/// W-tuples.
pub fn tuple_stats(x: &[u8]) -> TupleStats {
    let n = x.len();
    let sa = suffix_array(x);
    let lcp = lcp_array(x, &sa);
    let maxl = lcp.iter().copied().max().unwrap_or(0) as usize;
    let mut by_len: Vec<Vec<u32>> = vec![Vec::new(); maxl + 1];
    for (i, &l) in lcp.iter().enumerate().skip(1) {
        by_len[l as usize].push(i as u32);
    }
    let mut parent: Vec<u32> = (0..n as u32).collect();
    let mut size = vec![1u64; n];
    fn find(p: &mut [u32], mut a: u32) -> u32 {
        while p[a as usize] != a {
            p[a as usize] = p[p[a as usize] as usize];
            a = p[a as usize];
        }
        a
    }
    let mut pairs_now: u128 = 0;
    let mut max_now: u64 = 1;
    let mut max_count = vec![0u64; maxl + 2];
    let mut pairs = vec![0u128; maxl + 2];
    // W = maxl + 1: no repeats; each tuple occurs once.
    max_count[maxl + 1] = 1;
    for w in (1..=maxl).rev() {
        for &i in &by_len[w] {
            let a = find(&mut parent, i - 1);
            let b = find(&mut parent, i);
            if a != b {
                let (sa_, sb) = (size[a as usize], size[b as usize]);
                pairs_now += sa_ as u128 * sb as u128;
                parent[b as usize] = a;
                size[a as usize] = sa_ + sb;
                max_now = max_now.max(sa_ + sb);
            }
        }
        max_count[w] = max_now;
        pairs[w] = pairs_now;
    }
    TupleStats { max_count, pairs }
}

/// Naive tuple statistics for one length W (oracle): counts all W-tuples
/// in a map.
pub fn tuple_stats_naive(x: &[u8], w: usize) -> (u64, u128) {
    let mut m = std::collections::HashMap::<&[u8], u64>::new();
    for t in x.windows(w) {
        *m.entry(t).or_default() += 1;
    }
    let max = m.values().copied().max().unwrap_or(0);
    let pairs = m
        .values()
        .map(|&c| c as u128 * (c as u128).saturating_sub(1) / 2)
        .sum();
    (max, pairs)
}

/// Cutoff count of the t-tuple and LRS estimates (SP 800-90B sections
/// 6.3.5 and 6.3.6, from memory): 35.
pub const TUPLE_CUTOFF: u64 = 35;

fn upper_bound(p: f64, l: f64) -> f64 {
    (p + Z99 * (p * (1.0 - p) / (l - 1.0)).sqrt()).min(1.0)
}

/// t-tuple estimate (SP 800-90B section 6.3.5, from memory): t = the
/// largest length whose most common tuple occurs at least 35 times;
/// P_max[i] = (Q[i]/(L − i + 1))^(1/i) for i ≤ t, p̂ = max, p_u with the
/// 2.576 bound, H = −log2 p_u.
pub fn t_tuple(x: &[u8], stats: &TupleStats) -> Estimate {
    let name = "t-tuple (6.3.5)";
    let l = x.len();
    let t = (1..stats.max_count.len())
        .take_while(|&w| stats.max_count[w] >= TUPLE_CUTOFF)
        .last();
    let Some(t) = t else {
        return Estimate {
            name,
            min_entropy: None,
            detail: String::new(),
            note: Some("no value occurs 35 times".into()),
        };
    };
    let mut pmax = 0f64;
    for i in 1..=t {
        let p = stats.max_count[i] as f64 / (l - i + 1) as f64;
        pmax = pmax.max(p.powf(1.0 / i as f64));
    }
    let pu = upper_bound(pmax, l as f64);
    Estimate {
        name,
        min_entropy: Some(-pu.log2()),
        detail: format!("t = {t}, p_max = {pmax:.6}, p_u = {pu:.6}"),
        note: None,
    }
}

/// Longest repeated substring estimate (SP 800-90B section 6.3.6, from
/// memory): u = the least length whose most common tuple occurs fewer than
/// 35 times, v = the longest length with a repeated tuple; for W = u … v,
/// P_W = Σ C(C_i, 2)/C(L − W + 1, 2) and P_max,W = P_W^(1/W); p̂ = max,
/// p_u with the 2.576 bound, H = −log2 p_u.
pub fn lrs(x: &[u8], stats: &TupleStats) -> Estimate {
    let name = "longest repeated substring (6.3.6)";
    let l = x.len();
    let top = stats.max_count.len() - 1;
    let u = (1..=top)
        .find(|&w| stats.max_count[w] < TUPLE_CUTOFF)
        .unwrap_or(top + 1);
    let v = (1..=top)
        .rev()
        .find(|&w| stats.max_count[w] >= 2)
        .unwrap_or(0);
    if u > v {
        return Estimate {
            name,
            min_entropy: None,
            detail: format!("u = {u}, v = {v}"),
            note: Some("u > v: no tuple length to evaluate".into()),
        };
    }
    let mut pmax = 0f64;
    for w in u..=v {
        let m = (l - w + 1) as f64;
        let p = stats.pairs[w] as f64 / (m * (m - 1.0) / 2.0);
        pmax = pmax.max(p.powf(1.0 / w as f64));
    }
    let pu = upper_bound(pmax, l as f64);
    Estimate {
        name,
        min_entropy: Some(-pu.log2()),
        detail: format!("u = {u}, v = {v}, p_max = {pmax:.6}, p_u = {pu:.6}"),
        note: None,
    }
}

/// All estimates for binary samples and their minimum (SP 800-90B section
/// 6.2: the non-IID track takes the minimum; statistics.md 5.3).
#[derive(Clone, Debug, Serialize)]
pub struct Assessment {
    /// Number of samples L.
    pub samples: usize,
    /// Each estimator's result.
    pub estimates: Vec<Estimate>,
    /// Minimum over the estimates that apply (bits per sample).
    pub min_entropy: Option<f64>,
    /// Estimators left out, with the reason.
    pub left_out: Vec<(String, String)>,
}

/// Runs the six estimators on binary samples (bit values 0/1).
pub fn assess_binary(x: &[u8]) -> Assessment {
    let mut estimates = Vec::new();
    if x.len() >= 2 {
        let (p, pu, h) = most_common_value(x);
        estimates.push(Estimate {
            name: "most common value (6.3.1)",
            min_entropy: Some(h),
            detail: format!("p = {p:.6}, p_u = {pu:.6}"),
            note: None,
        });
    }
    estimates.push(collision(x));
    estimates.push(markov(x));
    estimates.push(compression(x));
    if x.len() >= 2 {
        let stats = tuple_stats(x);
        estimates.push(t_tuple(x, &stats));
        estimates.push(lrs(x, &stats));
    }
    let min = estimates
        .iter()
        .filter_map(|e| e.min_entropy)
        .fold(None, |a: Option<f64>, h| Some(a.map_or(h, |a| a.min(h))));
    Assessment {
        samples: x.len(),
        estimates,
        min_entropy: min,
        left_out: LEFT_OUT
            .iter()
            .map(|(a, b)| (a.to_string(), b.to_string()))
            .collect(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    /// statistics.md 5.2, MCV-1 (SP 800-90B section 6.3.1 worked example,
    /// from memory, moderate confidence; R).
    #[test]
    fn section_5_2_mcv1() {
        let s = [0u8, 1, 1, 2, 0, 1, 2, 2, 0, 1, 0, 1, 1, 0, 2, 2, 1, 0, 2, 1];
        let (p, pu, h) = most_common_value(&s);
        assert!((p - 0.4).abs() < 1e-15);
        assert!((pu - 0.6895).abs() <= 5e-5);
        assert!((pu - 0.6895174061).abs() < 1e-9);
        assert!((h - 0.5363).abs() <= 5e-5);
        assert!((h - 0.5363411235).abs() < 1e-9);
    }

    /// The collision expression as remembered equals the exact expected
    /// collision time of binary data, 2 + 2p(1 − p) (common practice: t = 2
    /// with probability p² + q², else t = 3).
    #[test]
    fn collision_expectation_closed_form() {
        for p in [0.5, 0.6, 0.75, 0.9, 0.99] {
            let e = collision_expectation_as_printed(p);
            assert!(
                (e - (2.0 + 2.0 * p * (1.0 - p))).abs() < 1e-12,
                "p={p}: {e}"
            );
        }
    }

    /// Markov: on a strictly alternating sequence the 0101… path has
    /// probability ½·1^127, so H = 1/128 (derived from the definition).
    #[test]
    fn markov_alternating() {
        let x: Vec<u8> = (0..1000).map(|i| (i % 2) as u8).collect();
        let e = markov(&x);
        assert!((e.min_entropy.unwrap() - 1.0 / 128.0).abs() < 1e-12);
    }

    /// At p = 2^−6 (uniform 6-bit blocks) the compression expectation
    /// G(p) + 63 G(q) is Maurer's expectedValue(6) = 5.2177052 (SP 800-22
    /// section 2.9.4 table, statistics.md 3.3): both are E[log2 D] for the
    /// distance D between repeats of a uniform 6-bit block (the dictionary
    /// start-up effect, (63/64)^1000 ≈ 1.5e-7, is negligible).
    #[test]
    fn compression_expectation_matches_maurer_table() {
        let l = 1_000_000 / 6;
        let p = 1.0 / 64.0;
        let e = compression_g(p, 1000, l) + 63.0 * compression_g(p, 1000, l);
        assert!((e - 5.2177052).abs() < 1e-5, "{e}");
    }

    proptest! {
        /// The O(L) G(z) equals the double sum.
        #[test]
        fn compression_g_matches_naive(z in 0.001f64..0.999, d in 1usize..20, extra in 1usize..60) {
            let l = d + extra;
            let a = compression_g(z, d, l);
            let b = compression_g_naive(z, d, l);
            prop_assert!((a - b).abs() < 1e-10 * b.abs().max(1.0), "{} vs {}", a, b);
        }

        /// The suffix-array tuple statistics equal direct counting.
        #[test]
        fn tuple_stats_match_naive(x in proptest::collection::vec(0u8..2, 2..400), bias in 0usize..3) {
            // bias some inputs towards long runs
            let x: Vec<u8> = x.iter().enumerate().map(|(i, &b)| if bias == 0 && i % 7 != 0 { 1 } else { b }).collect();
            let s = tuple_stats(&x);
            for w in 1..x.len().min(80) {
                let (m, p) = tuple_stats_naive(&x, w);
                let (fm, fp) = if w < s.max_count.len() { (s.max_count[w], s.pairs[w]) } else { (1, 0) };
                prop_assert_eq!((fm, fp), (m, p), "w = {}", w);
            }
        }
    }

    /// A fair-looking sequence gives estimates near 1 bit, a biased one
    /// near −log2(0.9) (common practice: MCV of Bernoulli(0.9) data).
    #[test]
    fn estimates_track_bias() {
        let mut s = 0x9e37_79b9_7f4a_7c15u64;
        let mut gen = |p: f64| {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            ((s >> 11) as f64 / (1u64 << 53) as f64) < p
        };
        let fair: Vec<u8> = (0..200_000).map(|_| gen(0.5) as u8).collect();
        let a = assess_binary(&fair);
        assert_eq!(a.estimates.len(), 6);
        for e in &a.estimates {
            let h = e.min_entropy.unwrap();
            assert!(h > 0.85 && h <= 1.0, "{}: {h}", e.name);
        }
        let biased: Vec<u8> = (0..200_000).map(|_| gen(0.9) as u8).collect();
        let a = assess_binary(&biased);
        let mcv = a.estimates[0].min_entropy.unwrap();
        assert!((mcv - (-(0.9f64).log2())).abs() < 0.01, "{mcv}");
        assert!(a.min_entropy.unwrap() <= mcv);
    }
}

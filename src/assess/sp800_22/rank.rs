//! Binary matrix rank test, SP 800-22 section 2.5 (statistics.md 2.5 and
//! 3.2).

use serde::Serialize;

/// Which probabilities to use for full rank, rank − 1 and the rest.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RankTable {
    /// Full precision from the closed form (statistics.md 3.2); Appendix B
    /// and section 2.5.8 need these (statistics.md section 6 item 3).
    #[default]
    Exact,
    /// The 32×32 values rounded to 4 decimals, 0.2888/0.5776/0.1336, as
    /// the section 2.5.4 example uses (even on 3×3 matrices).
    Printed32,
}

/// Probability that a random M×Q matrix over GF(2) has rank r
/// (SP 800-22 section 3.5; statistics.md 3.2):
/// p_r = 2^(r(Q+M−r) − MQ) Π_{i=0}^{r−1} (1 − 2^(i−Q))(1 − 2^(i−M))/(1 − 2^(i−r)).
pub fn rank_probability(m: usize, q: usize, r: usize) -> f64 {
    let (mi, qi, ri) = (m as i64, q as i64, r as i64);
    let mut p = 2f64.powi((ri * (qi + mi - ri) - mi * qi) as i32);
    for i in 0..ri {
        p *= (1.0 - 2f64.powi((i - qi) as i32)) * (1.0 - 2f64.powi((i - mi) as i32))
            / (1.0 - 2f64.powi((i - ri) as i32));
    }
    p
}

/// Rank over GF(2) of a matrix given as rows (bit j of a row = column j).
pub fn gf2_rank(rows: &mut [u64]) -> usize {
    let mut rank = 0;
    let n = rows.len();
    for col in 0..64 {
        let bit = 1u64 << col;
        let Some(piv) = (rank..n).find(|&i| rows[i] & bit != 0) else {
            continue;
        };
        rows.swap(rank, piv);
        let p = rows[rank];
        for (i, row) in rows.iter_mut().enumerate() {
            if i != rank && *row & bit != 0 {
                *row ^= p;
            }
        }
        rank += 1;
        if rank == n {
            break;
        }
    }
    rank
}

/// Result of the rank test.
#[derive(Clone, Debug, Serialize)]
pub struct Rank {
    /// Number of matrices N.
    pub matrices: usize,
    /// Matrices of full rank (F_M).
    pub full: u64,
    /// Matrices of rank M − 1 (F_{M−1}).
    pub full_minus_one: u64,
    /// The others.
    pub rest: u64,
    /// χ².
    pub chi_square: f64,
    /// P = e^(−χ²/2).
    pub p_value: f64,
}

/// Binary matrix rank test on M×Q matrices filled row by row (SP 800-22
/// section 2.5; statistics.md 2.5), for M, Q ≤ 64; the standard uses
/// M = Q = 32. Full rank means rank min(M, Q).
///
/// # Panics
/// If `m` or `q` is 0 or above 64, or `x` holds fewer than M·Q bits.
pub fn rank(x: &[u8], m: usize, q: usize, table: RankTable) -> Rank {
    assert!(
        (1..=64).contains(&m) && (1..=64).contains(&q),
        "rank: {m}x{q} matrices"
    );
    assert!(
        x.len() >= m * q,
        "rank: {} bits for {m}x{q} matrices",
        x.len()
    );
    let n_mat = x.len() / (m * q);
    let full_rank = m.min(q);
    let (mut full, mut minus1) = (0u64, 0u64);
    let mut rows = vec![0u64; m];
    for k in 0..n_mat {
        let base = k * m * q;
        for (r, row) in rows.iter_mut().enumerate() {
            let s = &x[base + r * q..base + (r + 1) * q];
            *row = s
                .iter()
                .enumerate()
                .fold(0u64, |acc, (j, &b)| acc | ((b as u64) << j));
        }
        let rk = gf2_rank(&mut rows);
        if rk == full_rank {
            full += 1;
        } else if rk + 1 == full_rank {
            minus1 += 1;
        }
    }
    let rest = n_mat as u64 - full - minus1;
    let (p_full, p_m1) = match table {
        RankTable::Exact => (
            rank_probability(m, q, full_rank),
            rank_probability(m, q, full_rank - 1),
        ),
        RankTable::Printed32 => (0.2888, 0.5776),
    };
    let p_rest = match table {
        RankTable::Exact => 1.0 - p_full - p_m1,
        RankTable::Printed32 => 0.1336,
    };
    let nf = n_mat as f64;
    let term = |f: u64, p: f64| (f as f64 - p * nf).powi(2) / (p * nf);
    let chi_square = term(full, p_full) + term(minus1, p_m1) + term(rest, p_rest);
    Rank {
        matrices: n_mat,
        full,
        full_minus_one: minus1,
        rest,
        chi_square,
        p_value: (-chi_square / 2.0).exp(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::bits;

    /// statistics.md 2.5, RK-1 (SP 800-22 section 2.5.4, from memory; R*:
    /// the example plugs in the 4-decimal 32×32 probabilities, statistics.md
    /// section 6 item 3). Also the full-precision recomputed value.
    #[test]
    fn section_2_5_rank_rk1() {
        let x = bits("01011001001010101101");
        let r = rank(&x, 3, 3, RankTable::Printed32);
        assert_eq!((r.matrices, r.full, r.full_minus_one, r.rest), (2, 1, 1, 0));
        assert!((r.chi_square - 0.596953).abs() <= 5e-7);
        assert!((r.p_value - 0.741948).abs() <= 5e-7);
        // statistics.md 2.5 RK-1 recomputed column: the 32x32 full-precision
        // probabilities on the same counts give chi^2 = 0.5970599639.
        let p32 = rank_probability(32, 32, 32);
        let p31 = rank_probability(32, 32, 31);
        let pr = 1.0 - p32 - p31;
        let chi = (1.0 - 2.0 * p32).powi(2) / (2.0 * p32)
            + (1.0 - 2.0 * p31).powi(2) / (2.0 * p31)
            + (2.0 * pr).powi(2) / (2.0 * pr);
        assert!((chi - 0.5970599639).abs() < 1e-9);
    }

    /// statistics.md 3.2: 32×32 and 3×3 probabilities.
    #[test]
    fn section_3_2_rank_probabilities() {
        let p = [rank_probability(32, 32, 32), rank_probability(32, 32, 31)];
        assert!((p[0] - 0.2887880952).abs() < 1e-10);
        assert!((p[1] - 0.5775761902).abs() < 1e-10);
        assert!((1.0 - p[0] - p[1] - 0.1336357147).abs() < 1e-10);
        assert!((rank_probability(3, 3, 3) - 0.328125).abs() < 1e-15);
        assert!((rank_probability(3, 3, 2) - 0.57421875).abs() < 1e-15);
    }

    /// Common practice: the rank distribution of all 512 3×3 matrices over
    /// GF(2) (168 are invertible) against the closed form.
    #[test]
    fn gf2_rank_enumeration_matches_closed_form() {
        let mut by_rank = [0u32; 4];
        for v in 0u64..512 {
            let mut rows = [v & 7, (v >> 3) & 7, (v >> 6) & 7];
            by_rank[gf2_rank(&mut rows)] += 1;
        }
        assert_eq!(by_rank[3], 168);
        for (r, &count) in by_rank.iter().enumerate() {
            assert!((count as f64 / 512.0 - rank_probability(3, 3, r)).abs() < 1e-15);
        }
    }
}

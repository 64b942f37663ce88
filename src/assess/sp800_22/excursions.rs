//! Random excursions (SP 800-22 section 2.14) and random excursions
//! variant (section 2.15) tests (statistics.md 2.14, 2.15 and 3.5).

use crate::assess::special::{erfc, igamc};
use serde::Serialize;

/// Which π_k(x) table the random excursions test uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ExcursionTable {
    /// Exact π_k(x) from the formulas of statistics.md 3.5 (section 2.14.8
    /// and Appendix B use these; statistics.md section 6 item 11). Default.
    #[default]
    Exact,
    /// The 4-decimal table printed in SP 800-22 section 3.14 (statistics.md
    /// 3.5), as the section 2.14.4 example uses.
    Printed,
}

/// π_0(x) … π_5(x) for |x| = 1 … 4 (statistics.md 3.5).
pub fn excursion_probabilities(x: i32, table: ExcursionTable) -> [f64; 6] {
    let a = x.unsigned_abs() as usize;
    assert!((1..=4).contains(&a), "state {x}");
    match table {
        ExcursionTable::Printed => [
            [0.5000, 0.2500, 0.1250, 0.0625, 0.0312, 0.0312],
            [0.7500, 0.0625, 0.0469, 0.0352, 0.0264, 0.0791],
            [0.8333, 0.0278, 0.0231, 0.0193, 0.0161, 0.0804],
            [0.8750, 0.0156, 0.0137, 0.0120, 0.0105, 0.0733],
        ][a - 1],
        ExcursionTable::Exact => {
            let af = a as f64;
            let r = 1.0 - 1.0 / (2.0 * af);
            let mut p = [0.0; 6];
            p[0] = r;
            for (k, pk) in p.iter_mut().enumerate().take(5).skip(1) {
                *pk = 1.0 / (4.0 * af * af) * r.powi(k as i32 - 1);
            }
            p[5] = 1.0 / (2.0 * af) * r.powi(4);
            p
        }
    }
}

/// The random walk's cycles: J and, per cycle, visits to states −9 … +9.
#[derive(Clone, Debug)]
pub struct Walk {
    /// Number of cycles J.
    pub cycles: u64,
    /// visits[c][x + 9] = visits to state x in cycle c, for |x| ≤ 4 only
    /// (the random excursions test needs no more).
    per_cycle: Vec<[u32; 9]>,
    /// Total visits ξ(x) to x = −9 … +9 (index x + 9).
    pub totals: [u64; 19],
}

/// Builds the walk S' = 0, S_1, …, S_n, 0 and splits it into cycles
/// (statistics.md 2.14).
pub fn walk(x: &[u8]) -> Walk {
    let mut s = 0i64;
    let mut per_cycle = Vec::new();
    let mut cur = [0u32; 9];
    let mut totals = [0u64; 19];
    let mut cycles = 0;
    for &b in x {
        s += if b == 1 { 1 } else { -1 };
        if s == 0 {
            per_cycle.push(cur);
            cur = [0; 9];
            cycles += 1;
        } else {
            if s.abs() <= 4 {
                cur[(s + 4) as usize] += 1;
            }
            if s.abs() <= 9 {
                totals[(s + 9) as usize] += 1;
            }
        }
    }
    if s != 0 {
        per_cycle.push(cur);
        cycles += 1;
    }
    Walk {
        cycles,
        per_cycle,
        totals,
    }
}

/// Result for one state of the random excursions test.
#[derive(Clone, Debug, Serialize)]
pub struct Excursion {
    /// The state x.
    pub state: i32,
    /// ν_0(x) … ν_5(x).
    pub nu: [u64; 6],
    /// χ²(x).
    pub chi_square: f64,
    /// P = igamc(5/2, χ²/2).
    pub p_value: f64,
}

/// Random excursions test for the states −4 … −1, +1 … +4 in that order
/// (SP 800-22 section 2.14; statistics.md 2.14).
pub fn random_excursions(w: &Walk, table: ExcursionTable) -> Vec<Excursion> {
    let j = w.cycles as f64;
    [-4, -3, -2, -1, 1, 2, 3, 4]
        .into_iter()
        .map(|state| {
            let mut nu = [0u64; 6];
            for c in &w.per_cycle {
                nu[(c[(state + 4) as usize] as usize).min(5)] += 1;
            }
            let pi = excursion_probabilities(state, table);
            let chi_square = nu
                .iter()
                .zip(pi)
                .map(|(&v, p)| (v as f64 - j * p).powi(2) / (j * p))
                .sum::<f64>();
            Excursion {
                state,
                nu,
                chi_square,
                p_value: igamc(2.5, chi_square / 2.0),
            }
        })
        .collect()
}

/// Result for one state of the random excursions variant test.
#[derive(Clone, Debug, Serialize)]
pub struct ExcursionVariant {
    /// The state x.
    pub state: i32,
    /// ξ(x), total visits.
    pub visits: u64,
    /// P = erfc(|ξ(x) − J| / √(2J(4|x| − 2))).
    pub p_value: f64,
}

/// Random excursions variant for the states −9 … −1, +1 … +9 in that order
/// (SP 800-22 section 2.15; statistics.md 2.15).
pub fn random_excursions_variant(w: &Walk) -> Vec<ExcursionVariant> {
    let j = w.cycles as f64;
    (-9..=9)
        .filter(|&x| x != 0)
        .map(|state: i32| {
            let visits = w.totals[(state + 9) as usize];
            let den = (2.0 * j * (4.0 * state.abs() as f64 - 2.0)).sqrt();
            ExcursionVariant {
                state,
                visits,
                p_value: erfc((visits as f64 - j).abs() / den),
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::assess::sp800_22::testdata::bits;

    /// statistics.md 2.14, RE-1 (SP 800-22 section 2.14.4, from memory; R*
    /// with the 4-decimal table). The exact table gives χ² = 4.333333,
    /// P = 0.5024875154 (recomputed column).
    #[test]
    fn section_2_14_random_excursions_re1() {
        let w = walk(&bits("0110110101"));
        assert_eq!(w.cycles, 3);
        let r = random_excursions(&w, ExcursionTable::Printed);
        let plus1 = &r[4];
        assert_eq!(plus1.state, 1);
        assert_eq!(plus1.nu, [1, 1, 0, 1, 0, 0]);
        assert!((plus1.chi_square - 4.333033).abs() <= 5e-7);
        assert!((plus1.p_value - 0.502529).abs() <= 5e-7);
        let r = random_excursions(&w, ExcursionTable::Exact);
        assert!((r[4].chi_square - 4.333333).abs() <= 5e-7);
        assert!((r[4].p_value - 0.5024875154).abs() <= 1e-9);
    }

    /// statistics.md 2.15, RV-1 (SP 800-22 section 2.15.4, from memory; R).
    #[test]
    fn section_2_15_random_excursions_variant_rv1() {
        let w = walk(&bits("0110110101"));
        let r = random_excursions_variant(&w);
        let plus1 = r.iter().find(|e| e.state == 1).unwrap();
        assert_eq!(plus1.visits, 4);
        assert!((plus1.p_value - 0.683091).abs() <= 5e-7);
    }

    /// statistics.md 3.5: the exact π_k(x) rounded to 4 decimals give the
    /// printed table (π_4(1) = 0.03125 printed as 0.0312).
    #[test]
    fn section_3_5_excursion_tables() {
        for x in 1..=4 {
            let e = excursion_probabilities(x, ExcursionTable::Exact);
            let p = excursion_probabilities(x, ExcursionTable::Printed);
            assert!((e.iter().sum::<f64>() - 1.0).abs() < 1e-12);
            for (a, b) in e.iter().zip(p) {
                assert!((a - b).abs() <= 5e-5 + 1e-12, "x={x}: {a} vs {b}");
            }
        }
    }
}

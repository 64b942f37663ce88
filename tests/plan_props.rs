//! Property tests of the planner: every chosen m satisfies its security
//! condition (spec/hashing-and-composition.md 2.3, 6.3; spec/trevisan.md
//! 6), and, where the spec says the search is monotone (the leftover-hash
//! formula), m never grows when k falls or the target tightens. The
//! Trevisan search is not monotone (spec/trevisan.md 6: "cond is not exactly
//! monotone"); for it we test what it guarantees: the result satisfies cond
//! and the design is what the spec defines.

use proptest::prelude::*;
use sluice::plan::compose::Budget;
use sluice::plan::lhl::{self, Family};
use sluice::plan::round;
use sluice::plan::select::{self, EntropyScope, NoSpeeds, Objective, SelectorInput};
use sluice::plan::trevisan::{self, Design, OneBit, TrevisanInputs};
use sluice::plan::two_source;

fn family() -> impl Strategy<Value = Family> {
    prop_oneof![Just(Family::Toeplitz), Just(Family::ModifiedToeplitz)]
}

/// An error parameter spread over many orders of magnitude.
fn eps() -> impl Strategy<Value = f64> {
    (-60.0f64..-1.0).prop_map(|e| 10f64.powf(e / 2.0))
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(256))]

    /// 2.3 and 2.5: eps_ext(k, m) <= target, m within the family's range,
    /// and m is the largest such length up to the boundary allowance of 2.5.
    #[test]
    fn lhl_m_is_secure_and_maximal(f in family(), n in 2u64..(1 << 24), rate in 0.0f64..=1.0, e in eps()) {
        let k = rate * n as f64;
        match lhl::max_m(f, n, k, e) {
            Ok(m) => {
                prop_assert!(m >= 1 && m <= f.max_output(n));
                prop_assert!(lhl::eps_ext(k, m) <= e);
                if m < f.max_output(n) && lhl::eps_ext(k, m + 1) <= e {
                    let x = k - 2.0 * (1.0 / e).log2();
                    prop_assert!((x - (m + 1) as f64).abs() < 1e-6, "not maximal: m = {}, x = {}", m, x);
                }
            }
            Err(_) => prop_assert!(k - 2.0 * (1.0 / e).log2() < 1.0 + 1e-6),
        }
    }

    /// m never grows when k falls or the target tightens (2.3 is monotone).
    #[test]
    fn lhl_m_monotone(f in family(), n in 2u64..(1 << 24), r1 in 0.0f64..=1.0, r2 in 0.0f64..=1.0, e1 in eps(), e2 in eps()) {
        let (lo_k, hi_k) = if r1 <= r2 { (r1, r2) } else { (r2, r1) };
        let (tight, loose) = if e1 <= e2 { (e1, e2) } else { (e2, e1) };
        let m = |k: f64, e: f64| lhl::max_m(f, n, k * n as f64, e).unwrap_or(0);
        prop_assert!(m(lo_k, loose) <= m(hi_k, loose));
        prop_assert!(m(hi_k, tight) <= m(hi_k, loose));
    }

    /// 5: more blocks, a weaker seed or more smoothing never give more
    /// output, and the composed total stays within the target.
    #[test]
    fn total_target_monotone(n in 64u64..(1 << 22), rate in 0.3f64..=1.0, total in eps(), l in 1u64..2000, s in 0.0f64..30.0, frac in 0.0f64..0.4) {
        let k = rate * n as f64;
        let base = Budget { blocks: l, seed_deficiency: s, ..Budget::single(total, total * frac / 4.0) };
        let m = |b: &Budget| lhl::max_m_for_total(Family::Toeplitz, n, k, b).unwrap_or(0);
        let m0 = m(&base);
        if m0 > 0 {
            prop_assert!(base.total(lhl::eps_ext(k, m0)) <= total);
        }
        let more_blocks = Budget { blocks: l + 1, ..base.clone() };
        let weaker_seed = Budget { seed_deficiency: s + 1.0, ..base.clone() };
        let more_smoothing = Budget { eps_s: base.eps_s * 1.5 + 1e-300, ..base.clone() };
        let tighter = Budget { eps_total: total / 2.0, ..base.clone() };
        for b in [more_blocks, weaker_seed, more_smoothing, tighter] {
            prop_assert!(m(&b) <= m0, "{:?}", b);
        }
    }

    /// spec/trevisan.md 6: the result satisfies cond(m), the design is the
    /// one of section 4 for the recorded integers, and the section-5 total is
    /// within the target.
    #[test]
    fn trevisan_result_satisfies_cond(
        n in 256u64..(1 << 16),
        rate in 0.2f64..=1.0,
        total in eps(),
        variant in 0usize..4,
        s in 0.0f64..20.0,
    ) {
        let (one_bit, design, c) = [
            (OneBit::Ph, Design::Poly, 1),
            (OneBit::Ph, Design::Poly, 8),
            (OneBit::Ph, Design::Block, 1),
            (OneBit::Ip, Design::Block, 1),
        ][variant];
        let k_s = rate * n as f64;
        let budget = Budget { seed_deficiency: s, ..Budget::single(total, total / 4.0) };
        let inp = TrevisanInputs { n, k_s, budget: budget.clone(), one_bit, design, c };
        let Ok(p) = trevisan::search(&inp) else { return Ok(()) };
        let m = p.function.m;
        prop_assert!(m >= 1 && (m as f64) <= k_s);
        let eps1 = budget.eps_ext().unwrap();
        let k_a = k_s + (1.0 - budget.eps_s).log2();
        let rm = p.shape.rm;
        match one_bit {
            OneBit::Ph => {
                let lambda = 2.0 * (3.0 * m as f64 / eps1).log2();
                prop_assert!((lambda - p.log2_inv_eps1).abs() < 1e-9);
                prop_assert!(3.0 * lambda + rm <= k_a);
                // The l rule of 3.1, checked with the slow direct form.
                let l = p.function.l.unwrap();
                let ok = |l: u64| {
                    let nb = n.div_ceil(l);
                    nb == 1 || ((nb - 1) as f64) <= (l as f64 + 1.0 - 2.0 * lambda).exp2()
                };
                prop_assert!(ok(l));
                prop_assert!(l == 1 || !ok(l - 1));
                prop_assert_eq!(p.shape.t, 2 * l);
            }
            OneBit::Ip => {
                let lambda = (m as f64 / eps1).log2();
                prop_assert!(2.0 * lambda + 1.0 + rm <= k_a);
                prop_assert_eq!(p.shape.d, n * m);
            }
        }
        let t = p.shape.t;
        prop_assert!(trevisan::is_prime(p.function.q) && p.function.q >= c * t);
        prop_assert!((c * t..p.function.q).all(|x| !trevisan::is_prime(x)));
        match design {
            Design::Poly => {
                let q = p.function.q as u128;
                let dd = p.shape.degree;
                prop_assert!(q.pow(dd + 1) >= m as u128);
                prop_assert!(dd == 0 || q.pow(dd) < m as u128);
                prop_assert!(u64::from(dd) < t);
                prop_assert!(p.shape.r <= (1.0 + 1.0 / q as f64).powf(t as f64) + 1e-12);
            }
            Design::Block => {
                let sizes: u64 = p.shape.groups.iter().map(|g| g.size).sum();
                prop_assert_eq!(sizes, m);
                let d: u64 = p.shape.groups.iter().map(|g| t * g.width).sum();
                prop_assert_eq!(d, p.shape.d);
                prop_assert_eq!(p.shape.r, 1.0);
            }
        }
        prop_assert!(p.eps_total <= total);
        prop_assert_eq!(p.function.seed_bits().unwrap(), p.shape.d);
    }

    /// 6.3: the classical two-source m satisfies its bound and never grows
    /// when an entropy falls or the target tightens.
    #[test]
    fn two_source_classical(idx in 0usize..4, r1 in 0.5f64..=1.0, r2 in 0.5f64..=1.0, e1 in eps(), e2 in eps()) {
        let n = [1019u64, 4093, 65371, 1048573][idx];
        let nf = n as f64;
        let m = |k1: f64, e: f64| two_source::max_m_classical(n, k1, r2 * nf, e).unwrap_or(0);
        let (tight, loose) = if e1 <= e2 { (e1, e2) } else { (e2, e1) };
        let m0 = m(r1 * nf, loose);
        if m0 > 0 {
            prop_assert!(two_source::eps_classical(n, r1 * nf, r2 * nf, m0) <= loose);
            prop_assert!(m0 < n);
        }
        prop_assert!(m(r1 * nf * 0.99, loose) <= m0);
        prop_assert!(m(r1 * nf, tight) <= m0);
    }

    /// The selector's choice meets the target and, for most-output, has the
    /// largest m of all rows.
    #[test]
    fn selector_choice_is_secure(n in 1024u64..(1 << 18), rate in 0.2f64..=1.0, total in eps(), l in 1u64..100) {
        let input = SelectorInput {
            n,
            k: rate * n as f64,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget { blocks: l, ..Budget::single(total, total / 8.0 / l as f64) },
            objective: Objective::MostOutput,
        };
        let s = select::select(&input, &NoSpeeds).unwrap();
        if let Some(i) = s.chosen {
            let p = s.rows[i].outcome.as_ref().unwrap();
            prop_assert!(p.eps_total <= total);
            for r in &s.rows {
                if let Ok(q) = &r.outcome {
                    prop_assert!(q.m <= p.m);
                    prop_assert!(q.eps_total <= total);
                }
            }
        }
    }

    /// 2.5: printed errors are rounded up, budgets down.
    #[test]
    fn rounding_directions(x in 1e-300f64..1.0, digits in 1usize..8) {
        let up: f64 = round::up(x, digits).parse().unwrap();
        prop_assert!(up >= x);
        let down: f64 = round::down(x, digits).parse().unwrap();
        prop_assert!(down <= x * (1.0 + 1e-9));
    }
}

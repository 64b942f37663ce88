//! Every engine of every hashing extractor against the slow matrix twins
//! (`sluice::extract::reference`), on random sizes and inputs, plus the check
//! vectors of `spec/hashing-and-composition.md` 3.4.

use proptest::prelude::*;
use sluice::bits::Bits;
use sluice::extract::{reference, Engine, Extractor, ModifiedToeplitz, Thresholds, Toeplitz};
use sluice::gf2::Backend;

fn bits_from(seed: u64, n: usize) -> Bits {
    // splitmix64 stream (common practice for test data)
    let mut s = seed;
    let words = (0..n.div_ceil(64))
        .map(|_| {
            s = s.wrapping_add(0x9e37_79b9_7f4a_7c15);
            let mut z = s;
            z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
            z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
            z ^ (z >> 31)
        })
        .collect();
    Bits::from_words(words, n)
}

fn check_all_engines(n: usize, m: usize, seed: u64) {
    let x = bits_from(seed, n);
    let s = bits_from(seed ^ 0xabcdef, n + m - 1);
    let want = reference::toeplitz(&x, &s, m);
    for e in Engine::all_supported() {
        let plan = Toeplitz::with_engine(n, m, e).unwrap();
        let mut y = Bits::zeros(m);
        plan.extract(&x, &s, &mut y);
        assert_eq!(y, want, "toeplitz {e} n={n} m={m}");
        // the bound seed gives the same bits, twice (scratch reuse)
        let bound = plan.with_seed(&s);
        for _ in 0..2 {
            let mut y2 = Bits::zeros(m);
            bound.extract(&x, &mut y2);
            assert_eq!(y2, want, "toeplitz bound {e} n={n} m={m}");
        }
    }
    if m < n {
        let s = bits_from(seed ^ 0x5eed, n - 1);
        let want = reference::modified_toeplitz(&x, &s, m);
        for e in Engine::all_supported() {
            let plan = ModifiedToeplitz::with_engine(n, m, e).unwrap();
            let mut y = Bits::zeros(m);
            plan.extract(&x, &s, &mut y);
            assert_eq!(y, want, "modified {e} n={n} m={m}");
            let bound = plan.with_seed(&s);
            let mut y2 = Bits::zeros(m);
            bound.extract(&x, &mut y2);
            assert_eq!(y2, want, "modified bound {e} n={n} m={m}");
        }
    }
}

#[test]
fn edge_sizes() {
    // n = 1, m = 1, m = n, word and byte edges (issue list of edge cases).
    for &(n, m) in &[
        (1, 1),
        (2, 1),
        (2, 2),
        (7, 3),
        (8, 8),
        (9, 1),
        (63, 63),
        (64, 1),
        (64, 63),
        (64, 64),
        (65, 64),
        (65, 65),
        (127, 1),
        (128, 128),
        (129, 100),
        (513, 511),
        (1000, 1),
        (2049, 2048),
    ] {
        check_all_engines(n, m, (n * 1000 + m) as u64);
    }
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    #[test]
    fn random_sizes_agree_with_matrix_definition(n in 1usize..1500, frac in 0.0f64..=1.0, seed in any::<u64>()) {
        let m = ((n as f64 * frac) as usize).clamp(1, n);
        check_all_engines(n, m, seed);
    }
}

#[test]
fn larger_sizes_agree_across_engines() {
    // The matrix twin is O(nm); above a few thousand bits compare the engines
    // with each other, anchored to the twin by the sizes above.
    for &(n, m) in &[
        (20_000, 10_000),
        (64 * 300 + 17, 64 * 170 + 9),
        (1 << 16, 1 << 15),
    ] {
        let x = bits_from(n as u64, n);
        let s = bits_from(m as u64, n + m - 1);
        let mut outs = Vec::new();
        for e in Engine::all_supported() {
            let plan = Toeplitz::with_engine(n, m, e).unwrap();
            let mut y = Bits::zeros(m);
            plan.extract(&x, &s, &mut y);
            outs.push((e, y));
        }
        for (e, y) in &outs[1..] {
            assert_eq!(y, &outs[0].1, "{e} vs {} at n={n}", outs[0].0);
        }
    }
}

#[test]
fn spec_3_4_test_vectors() {
    // spec/hashing-and-composition.md 3.4, computed there by
    // check_universality.py from the conventions' definitions.
    let x = Bits::from_ascii("0111101101101111").unwrap();
    let s = Bits::from_ascii("00101011010101110010011").unwrap();
    for e in Engine::all_supported() {
        let mut y = Bits::zeros(8);
        Toeplitz::with_engine(16, 8, e)
            .unwrap()
            .extract(&x, &s, &mut y);
        assert_eq!(y.to_ascii(), "00101010", "{e}");
        assert_eq!(y.to_hex(Default::default()), "2a");
    }
    let s = Bits::from_ascii("001010110101011").unwrap();
    for e in Engine::all_supported() {
        let mut y = Bits::zeros(8);
        ModifiedToeplitz::with_engine(16, 8, e)
            .unwrap()
            .extract(&x, &s, &mut y);
        assert_eq!(y.to_ascii(), "01001110", "{e}");
    }
    // The twins agree with the spec too.
    assert_eq!(
        reference::toeplitz(&x, &Bits::from_ascii("00101011010101110010011").unwrap(), 8)
            .to_ascii(),
        "00101010"
    );
}

#[test]
fn refusals() {
    assert!(Toeplitz::new(0, 1).is_err());
    assert!(Toeplitz::new(10, 0).is_err());
    assert!(Toeplitz::new(10, 11).is_err());
    assert!(ModifiedToeplitz::new(10, 10).is_err());
    let e = Toeplitz::new(10, 11).err().unwrap().to_string();
    assert!(e.contains("11") && e.contains("1..=10"), "{e}");
}

#[test]
fn exhaustive_universality_small() {
    // spec 3.4 [computed, check_universality.py]: over all seeds and all
    // nonzero differences the collision probability is at most 2^-m, exactly
    // 2^-m at the maximum (Toeplitz n = 2..7; modified n = 2..9, m < n).
    // Re-implemented here on the fast path: for linear families a collision
    // of u means h_s(u) = 0.
    for n in 2..=7usize {
        for m in 1..=n {
            let plan = Toeplitz::new(n, m).unwrap();
            let d = n + m - 1;
            let mut worst = 0u64;
            for u in 1u64..(1 << n) {
                let ub = Bits::from_words(vec![u], n);
                let mut zeros = 0u64;
                for s in 0u64..(1 << d) {
                    let mut y = Bits::zeros(m);
                    plan.extract(&ub, &Bits::from_words(vec![s], d), &mut y);
                    zeros += (y.count_ones() == 0) as u64;
                }
                worst = worst.max(zeros);
            }
            assert_eq!(worst, 1 << (d - m), "toeplitz n={n} m={m}");
        }
    }
    for n in 2..=9usize {
        for m in 1..n {
            let plan = ModifiedToeplitz::new(n, m).unwrap();
            let d = n - 1;
            let (mut worst, mut best) = (0u64, u64::MAX);
            for u in 1u64..(1 << n) {
                let ub = Bits::from_words(vec![u], n);
                let mut zeros = 0u64;
                for s in 0u64..(1 << d) {
                    let mut y = Bits::zeros(m);
                    plan.extract(&ub, &Bits::from_words(vec![s], d), &mut y);
                    zeros += (y.count_ones() == 0) as u64;
                }
                worst = worst.max(zeros);
                best = best.min(zeros);
            }
            assert_eq!(worst, 1 << (d - m), "modified n={n} m={m}");
            assert_eq!(best, 0, "modified n={n} m={m}: u_tail = 0 never collides");
        }
    }
}

/// Thresholds for `Engine::Auto`, lowered so that sizes up to ~2^18 reach
/// the additive FFT, and not powers of two. Installed once for this test
/// process (installation is once per process; no other test here uses
/// `Auto` at these sizes).
const AUTO_TEST: Thresholds = Thresholds {
    input_bits: (1 << 17) + 12_345,
    output_bits: 3_001,
};

fn install_auto_test_thresholds() {
    Thresholds::install(AUTO_TEST);
    assert_eq!(
        Thresholds::current(),
        AUTO_TEST,
        "other thresholds installed"
    );
}

/// `Engine::Auto` gives the bits of the Karatsuba engine for Toeplitz and
/// modified Toeplitz hashing, and picks the engine its thresholds say;
/// returns the engine Toeplitz hashing resolved to.
fn check_auto(n: usize, m: usize, seed: u64) -> Engine {
    install_auto_test_thresholds();
    let kara = Engine::Clmul(Backend::detect());
    let x = bits_from(seed, n);
    let s = bits_from(seed ^ 0xabcdef, n + m - 1);
    let auto = Toeplitz::with_engine(n, m, Engine::Auto).unwrap();
    let want_additive = n >= AUTO_TEST.input_bits && m >= AUTO_TEST.output_bits;
    assert_eq!(
        matches!(auto.engine(), Engine::Additive(_)),
        want_additive,
        "toeplitz n={n} m={m}: auto chose {}",
        auto.engine()
    );
    let (mut y, mut want) = (Bits::zeros(m), Bits::zeros(m));
    auto.extract(&x, &s, &mut y);
    Toeplitz::with_engine(n, m, kara)
        .unwrap()
        .extract(&x, &s, &mut want);
    assert_eq!(y, want, "toeplitz auto ({}) n={n} m={m}", auto.engine());
    if m < n {
        // The modified family hashes the last n - m bits with an m x (n - m)
        // Toeplitz matrix, so Auto decides on (n - m, m).
        let s = bits_from(seed ^ 0x5eed, n - 1);
        let auto_m = ModifiedToeplitz::with_engine(n, m, Engine::Auto).unwrap();
        let (mut y, mut want) = (Bits::zeros(m), Bits::zeros(m));
        auto_m.extract(&x, &s, &mut y);
        ModifiedToeplitz::with_engine(n, m, kara)
            .unwrap()
            .extract(&x, &s, &mut want);
        assert_eq!(y, want, "modified auto ({}) n={n} m={m}", auto_m.engine());
    }
    auto.engine()
}

#[test]
fn auto_engine_at_its_thresholds() {
    // Every side of both thresholds, m = 1 and m = n; both engines are hit.
    let (tn, tm) = (AUTO_TEST.input_bits, AUTO_TEST.output_bits);
    let mut seen = (false, false);
    for n in [tn - 1, tn, tn + 1, tn + 64 * 37 + 5] {
        for m in [1, tm - 1, tm, tm + 1, n / 2 + 3, n - 1, n] {
            let e = check_auto(n, m, (n ^ (m << 20)) as u64);
            match e {
                Engine::Additive(_) => seen.0 = true,
                _ => seen.1 = true,
            }
        }
    }
    assert!(seen.0 && seen.1, "both engines must be reached: {seen:?}");
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(24))]
    #[test]
    fn auto_engine_matches_karatsuba_around_its_thresholds(
        near in any::<bool>(),
        dn in -3000i64..3000,
        wide_n in 1usize..(1 << 18),
        m_kind in 0usize..4,
        dm in -400i64..400,
        frac in 0.0f64..=1.0,
        seed in any::<u64>(),
    ) {
        // n near the input threshold, or anywhere up to 2^18; m = 1, m = n,
        // near the output threshold, or any fraction of n.
        let n = if near {
            (AUTO_TEST.input_bits as i64 + dn) as usize
        } else {
            wide_n
        };
        let m = match m_kind {
            0 => 1,
            1 => n,
            2 => ((AUTO_TEST.output_bits as i64 + dm) as usize).clamp(1, n),
            _ => ((n as f64 * frac) as usize).clamp(1, n),
        };
        check_auto(n, m, seed);
    }
}

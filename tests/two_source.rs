//! The cyclic-shift two-source extractor: every engine against the slow twin
//! (`sluice::extract::reference::two_source`, the definition of
//! `spec/hashing-and-composition.md` 6.2) on random valid sizes, the
//! polynomial form of 6.2 through the crate's full carry-less product, and the
//! check rows of the 6.2 table.

use proptest::prelude::*;
use sluice::bits::{BitOrder, Bits};
use sluice::extract::{reference, Engine, Extractor, TwoSource};
use sluice::gf2::{karatsuba, Backend};
use sluice::plan::two_source::valid_n;

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

/// The polynomial form of 6.2, written out: `Xrev(z) = sum_j x_{(-j) mod n}
/// z^j`, the full product with `Y(z)` by `karatsuba::mul`, then the fold
/// `z^(n+k) = z^k` bit by bit.
fn polynomial_form(x: &Bits, y: &Bits, m: usize, be: Backend) -> Bits {
    let n = x.len();
    let mut xrev = Bits::zeros(n);
    for j in 0..n {
        xrev.set(j, x.get((n - j) % n));
    }
    let w = n.div_ceil(64);
    let mut prod = vec![0u64; 2 * w];
    karatsuba::mul(be, xrev.words(), y.words(), &mut prod);
    let prod = Bits::from_words(prod, 2 * w * 64);
    let mut z = Bits::zeros(m);
    for i in 0..m {
        let mut b = false;
        let mut k = i;
        while k < 2 * n - 1 {
            b ^= prod.get(k);
            k += n;
        }
        z.set(i, b);
    }
    z
}

fn check(n: usize, m: usize, seed: u64) {
    let x = bits_from(seed, n);
    let y = bits_from(seed ^ 0x2_50c3, n);
    let want = reference::two_source(&x, &y, m);
    for e in Engine::all_supported() {
        let plan = match TwoSource::with_engine(n, m, e) {
            Ok(p) => p,
            // The FFT engine may refuse large sizes (its rounding bound).
            Err(_) if e == Engine::Fft => continue,
            Err(err) => panic!("{e} n={n} m={m}: {err}"),
        };
        assert_eq!(plan.seed_bits(), n);
        let mut z = Bits::zeros(m);
        plan.extract(&x, &y, &mut z);
        assert_eq!(z, want, "two-source {e} n={n} m={m}");
        let bound = plan.with_seed(&y);
        for _ in 0..2 {
            let mut z2 = Bits::zeros(m);
            bound.extract(&x, &mut z2);
            assert_eq!(z2, want, "two-source bound {e} n={n} m={m}");
        }
    }
    for be in Backend::all_supported() {
        assert_eq!(
            polynomial_form(&x, &y, m, be),
            want,
            "polynomial form {} n={n} m={m}",
            be.name()
        );
    }
}

fn valid_ns(limit: usize) -> Vec<usize> {
    (3..=limit).filter(|&n| valid_n(n as u64)).collect()
}

// spec/hashing-and-composition.md 6.2, check values [computed there,
// check_deor.py, from the definition of 6.2]; x and y as written in the
// table (x_0 first) and as the packed hex given there.
#[test]
fn spec_check_rows() {
    let x = Bits::from_ascii("1100111001010").unwrap();
    let y = Bits::from_ascii("1101011100000").unwrap();
    assert_eq!(x, Bits::from_hex("ce50", Some(13), BitOrder::Msb).unwrap());
    assert_eq!(y, Bits::from_hex("d700", Some(13), BitOrder::Msb).unwrap());
    let e = |i: usize| {
        let mut b = Bits::zeros(13);
        b.set(i, true);
        b
    };
    let rows = [
        (x, y, 5, Bits::from_ascii("00010").unwrap(), "10"),
        (e(1), e(4), 12, e(3).slice(0, 12), "1000"),
        (e(5), e(2), 12, e(10).slice(0, 12), "0020"),
    ];
    for (x, y, m, z, hex) in rows {
        assert_eq!(z.to_hex(BitOrder::Msb), hex);
        assert_eq!(reference::two_source(&x, &y, m), z, "slow twin");
        for e in Engine::all_supported() {
            let plan = TwoSource::with_engine(13, m, e).unwrap();
            let mut out = Bits::zeros(m);
            plan.extract(&x, &y, &mut out);
            assert_eq!(out, z, "{e}");
        }
    }
}

#[test]
fn edge_sizes() {
    // Small valid n, m = 1 and m = n - 1, word and byte edges around 64 and
    // 128 (61, 67, 131, 139), and a few larger lengths.
    for &n in &[3usize, 5, 11, 13, 19, 29, 59, 61, 67, 131, 139, 1019, 2053] {
        assert!(valid_n(n as u64), "{n}");
        for m in [1, 2, n / 2, n - 2, n - 1] {
            if m >= 1 {
                check(n, m, (n * 7919 + m) as u64);
            }
        }
    }
    // A larger size with the full wrap-around (m = n - 1).
    check(4093, 4092, 42);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(64))]
    #[test]
    fn fast_matches_definition(idx in 0usize..1000, mfrac in 0.0f64..1.0, seed: u64) {
        let ns = valid_ns(1500);
        let n = ns[idx % ns.len()];
        let m = 1 + ((n - 2) as f64 * mfrac) as usize;
        check(n, m, seed);
    }
}

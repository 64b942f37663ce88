//! Slow twins of the extractors: the matrix definitions of
//! `spec/conventions.md`, written with `bitvec` independently of the word
//! layout the fast code uses. Tests compare every backend with these, and the
//! vector generator computes published outputs with them.

use crate::bits::Bits;
use bitvec::prelude::*;

fn to_bitvec(b: &Bits) -> BitVec<u8, Lsb0> {
    b.iter().collect()
}

fn from_bitvec(v: &BitVec<u8, Lsb0>) -> Bits {
    let bools: Vec<bool> = v.iter().map(|b| *b).collect();
    Bits::from_bools(&bools)
}

/// Toeplitz hashing by its matrix: `T[i][j] = s_{i - j + n - 1}`,
/// `y_i = XOR_j T[i][j] AND x_j` (conventions.md, "Toeplitz hashing").
///
/// # Panics
/// If `seed` does not have `n + m - 1` bits or `m` is not in `1..=n`.
pub fn toeplitz(x: &Bits, seed: &Bits, m: usize) -> Bits {
    let n = x.len();
    assert!(m >= 1 && m <= n, "toeplitz: m = {m} must be in 1..={n}");
    assert_eq!(
        seed.len(),
        n + m - 1,
        "toeplitz: seed must have n + m - 1 bits"
    );
    let xv = to_bitvec(x);
    let sv = to_bitvec(seed);
    let mut y: BitVec<u8, Lsb0> = BitVec::repeat(false, m);
    for i in 0..m {
        let mut acc = false;
        for j in 0..n {
            acc ^= sv[i + n - 1 - j] & xv[j];
        }
        y.set(i, acc);
    }
    from_bitvec(&y)
}

/// Modified Toeplitz hashing: `y = x_head XOR T' x_tail`, with `T'` the
/// m x (n - m) Toeplitz matrix of the n - 1 seed bits (conventions.md,
/// "Modified Toeplitz hashing").
///
/// # Panics
/// If `seed` does not have `n - 1` bits or `m` is not in `1..n`.
pub fn modified_toeplitz(x: &Bits, seed: &Bits, m: usize) -> Bits {
    let n = x.len();
    assert!(
        m >= 1 && m < n,
        "modified toeplitz: m = {m} must be in 1..{n}"
    );
    assert_eq!(
        seed.len(),
        n - 1,
        "modified toeplitz: seed must have n - 1 bits"
    );
    let xv = to_bitvec(x);
    let sv = to_bitvec(seed);
    let nt = n - m;
    let mut y: BitVec<u8, Lsb0> = BitVec::repeat(false, m);
    for i in 0..m {
        let mut acc = xv[i];
        for j in 0..nt {
            acc ^= sv[i + nt - 1 - j] & xv[m + j];
        }
        y.set(i, acc);
    }
    from_bitvec(&y)
}

/// The cyclic-shift two-source extractor by its definition
/// (`spec/hashing-and-composition.md` 6.2):
/// `z_i = XOR_j x_j AND y_{(i + j) mod n}`, `i = 0 .. m-1`. Here `y` is the
/// second raw source, not a seed. Any lengths `n >= 1`, `m >= 1` are
/// computed (validity of n is the plan's business, not the definition's).
///
/// # Panics
/// If `y` does not have the length of `x`, or `m == 0`.
pub fn two_source(x: &Bits, y: &Bits, m: usize) -> Bits {
    let n = x.len();
    assert!(n >= 1 && m >= 1, "two-source: n and m must be at least 1");
    assert_eq!(y.len(), n, "two-source: both sources must have n bits");
    let xv = to_bitvec(x);
    let yv = to_bitvec(y);
    let mut z: BitVec<u8, Lsb0> = BitVec::repeat(false, m);
    for i in 0..m {
        let mut acc = false;
        for j in 0..n {
            acc ^= xv[j] & yv[(i + j) % n];
        }
        z.set(i, acc);
    }
    from_bitvec(&z)
}

//! Portable carry-less multiplication (no special instructions).

/// Carry-less product of two 64-bit polynomials: `(low word, high word)`.
///
/// Branch-free: each bit of `b` selects a shifted copy of `a` by a mask, so
/// the time does not depend on the operands (they may be seed bits).
#[inline]
pub fn clmul64(a: u64, b: u64) -> (u64, u64) {
    let mut lo = 0u64;
    let mut hi = 0u64;
    for i in 0..64 {
        let mask = 0u64.wrapping_sub((b >> i) & 1);
        let t = a & mask;
        lo ^= t << i;
        // `t >> (64 - i)` for i = 0 would be a full shift; split it in two.
        hi ^= (t >> 1) >> (63 - i);
    }
    (lo, hi)
}

/// Base case of the word-level middle product, accumulating:
/// `out[2r], out[2r+1] ^= XOR_j clmul(a[r + b - 1 - j], x[j])` for `r, j < b`,
/// with `b = x.len()`, `a.len() == 2b - 1`, `out.len() == 2b`.
pub fn mp_base(a: &[u64], x: &[u64], out: &mut [u64]) {
    let b = x.len();
    debug_assert_eq!(a.len(), 2 * b - 1);
    debug_assert_eq!(out.len(), 2 * b);
    for r in 0..b {
        let (mut lo, mut hi) = (0u64, 0u64);
        for (j, &xj) in x.iter().enumerate() {
            let (l, h) = clmul64(a[r + b - 1 - j], xj);
            lo ^= l;
            hi ^= h;
        }
        out[2 * r] ^= lo;
        out[2 * r + 1] ^= hi;
    }
}

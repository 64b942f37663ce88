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

//! 64 x 64 -> 128 carry-less multiplication with PCLMULQDQ (x86-64).

#[cfg(target_arch = "x86_64")]
use core::arch::x86_64::*;

/// Carry-less product `(low, high)` with the PCLMULQDQ instruction.
///
/// # Safety
/// The CPU must support `pclmulqdq` and `sse2` (checked by
/// [`super::Backend::detect`] or `is_x86_feature_detected!`).
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2")]
#[inline]
pub unsafe fn clmul64(a: u64, b: u64) -> (u64, u64) {
    let va = _mm_set_epi64x(0, a as i64);
    let vb = _mm_set_epi64x(0, b as i64);
    let p = _mm_clmulepi64_si128(va, vb, 0x00);
    let lo = _mm_cvtsi128_si64(p) as u64;
    let hi = _mm_cvtsi128_si64(_mm_unpackhi_epi64(p, p)) as u64;
    (lo, hi)
}

/// Base case of the word-level middle product with PCLMULQDQ; same contract
/// as [`super::portable::mp_base`].
///
/// # Safety
/// The CPU must support `pclmulqdq` and `sse2`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "pclmulqdq,sse2")]
pub unsafe fn mp_base(a: &[u64], x: &[u64], out: &mut [u64]) {
    let b = x.len();
    assert!(a.len() == 2 * b - 1 && out.len() == 2 * b);
    // Two rows at a time: a[r + b - 1 - j] and a[r + b - j] are adjacent, so
    // one 128-bit load feeds both rows (low and high qword selectors).
    let mut r = 0;
    while r + 2 <= b {
        let mut acc0 = _mm_setzero_si128();
        let mut acc1 = _mm_setzero_si128();
        for (j, &xj) in x.iter().enumerate() {
            let vx = _mm_set_epi64x(0, xj as i64);
            // SAFETY: r + b - 1 - j + 1 <= 2b - 2 < a.len().
            let va = _mm_loadu_si128(a.as_ptr().add(r + b - 1 - j) as *const __m128i);
            acc0 = _mm_xor_si128(acc0, _mm_clmulepi64_si128(va, vx, 0x00));
            acc1 = _mm_xor_si128(acc1, _mm_clmulepi64_si128(va, vx, 0x01));
        }
        let o = out.as_mut_ptr().add(2 * r) as *mut __m128i;
        _mm_storeu_si128(o, _mm_xor_si128(_mm_loadu_si128(o), acc0));
        let o1 = o.add(1);
        _mm_storeu_si128(o1, _mm_xor_si128(_mm_loadu_si128(o1), acc1));
        r += 2;
    }
    if r < b {
        let mut acc = _mm_setzero_si128();
        for (j, &xj) in x.iter().enumerate() {
            let vx = _mm_set_epi64x(0, xj as i64);
            let va = _mm_set_epi64x(0, a[r + b - 1 - j] as i64);
            acc = _mm_xor_si128(acc, _mm_clmulepi64_si128(va, vx, 0x00));
        }
        let o = out.as_mut_ptr().add(2 * r) as *mut __m128i;
        _mm_storeu_si128(o, _mm_xor_si128(_mm_loadu_si128(o), acc));
    }
}

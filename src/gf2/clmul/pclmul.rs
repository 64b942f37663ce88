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

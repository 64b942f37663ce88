//! AVX2 + VPCLMULQDQ kernels on 256-bit registers: two 64 x 64 carry-less
//! products per instruction, accumulated in registers. For CPUs that have
//! VPCLMULQDQ but not AVX-512 (e.g. AMD Zen 3).

#[cfg(target_arch = "x86_64")]
use core::arch::x86_64::*;

/// Row counts the vector base case handles (multiples of 4 up to 64).
pub const fn supports_base(b: usize) -> bool {
    b.is_multiple_of(4) && b >= 4 && b <= 64
}

/// Rows per pass over the columns: 4 groups of 4 rows keep 8 accumulators,
/// the broadcast and the loads within the 16 ymm registers.
const GROUPS_PER_PASS: usize = 4;

/// Base case of the word-level middle product; same contract as
/// [`super::portable::mp_base`], for `b = x.len()` a multiple of 4 in 4..=64.
///
/// # Safety
/// The CPU must support `vpclmulqdq`, `avx2` and `pclmulqdq`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "vpclmulqdq,avx2,pclmulqdq")]
pub unsafe fn mp_base(a: &[u64], x: &[u64], out: &mut [u64]) {
    let b = x.len();
    assert!(supports_base(b) && a.len() == 2 * b - 1 && out.len() == 2 * b);
    let groups = b / 4;
    let mut g0 = 0;
    while g0 + GROUPS_PER_PASS <= groups {
        mp_groups::<GROUPS_PER_PASS>(a, x, out, g0);
        g0 += GROUPS_PER_PASS;
    }
    match groups - g0 {
        0 => {}
        1 => mp_groups::<1>(a, x, out, g0),
        2 => mp_groups::<2>(a, x, out, g0),
        _ => mp_groups::<3>(a, x, out, g0),
    }
}

/// Rows `4 g0 .. 4 (g0 + G)`. For a fixed column j, rows `4g .. 4g + 4` need
/// `a[4g + b - 1 - j ..][..4]`: one 256-bit load. Selector 0x00 multiplies
/// qwords 0 and 2 (rows 4g, 4g+2), selector 0x01 qwords 1 and 3 (rows 4g+1,
/// 4g+3), each by x[j] broadcast; each 128-bit lane accumulates one row.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "vpclmulqdq,avx2,pclmulqdq")]
#[inline]
unsafe fn mp_groups<const G: usize>(a: &[u64], x: &[u64], out: &mut [u64], g0: usize) {
    let b = x.len();
    debug_assert!(4 * (g0 + G) <= b);
    let mut even = [_mm256_setzero_si256(); G];
    let mut odd = [_mm256_setzero_si256(); G];
    let ap = a.as_ptr().add(4 * g0 + b - 1);
    for (j, &xj) in x.iter().enumerate() {
        let vx = _mm256_set1_epi64x(xj as i64);
        for g in 0..G {
            // SAFETY: indices read are 4(g0 + g) + b - 1 - j + (0..4): at
            // least 4 g0 >= 0 (j <= b - 1) and at most 4 (g0 + G - 1) + b + 2
            // <= 2b - 2 < a.len() (g0 + G <= b / 4).
            let va = _mm256_loadu_si256(ap.add(4 * g).sub(j) as *const __m256i);
            even[g] = _mm256_xor_si256(even[g], _mm256_clmulepi64_epi128(va, vx, 0x00));
            odd[g] = _mm256_xor_si256(odd[g], _mm256_clmulepi64_epi128(va, vx, 0x01));
        }
    }
    // Rows 4g .. 4g+3 are (even.lane0, odd.lane0, even.lane1, odd.lane1).
    let op = out.as_mut_ptr().add(8 * g0);
    for g in 0..G {
        let r0 = _mm256_permute2x128_si256(even[g], odd[g], 0x20);
        let r1 = _mm256_permute2x128_si256(even[g], odd[g], 0x31);
        let p0 = op.add(8 * g) as *mut __m256i;
        let p1 = op.add(8 * g + 4) as *mut __m256i;
        _mm256_storeu_si256(p0, _mm256_xor_si256(_mm256_loadu_si256(p0), r0));
        _mm256_storeu_si256(p1, _mm256_xor_si256(_mm256_loadu_si256(p1), r1));
    }
}

/// `dst[i] ^= src[i]`, compiled for AVX2.
///
/// # Safety
/// The CPU must support `avx2`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
pub unsafe fn xor_into(dst: &mut [u64], src: &[u64]) {
    for (d, s) in dst.iter_mut().zip(src) {
        *d ^= s;
    }
}

/// `dst[i] = a[i] ^ b[i]`, compiled for AVX2.
///
/// # Safety
/// The CPU must support `avx2`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx2")]
pub unsafe fn xor3(dst: &mut [u64], a: &[u64], b: &[u64]) {
    for ((d, x), y) in dst.iter_mut().zip(a).zip(b) {
        *d = x ^ y;
    }
}

//! AVX-512 VPCLMULQDQ kernels: four 64 x 64 carry-less products per
//! instruction, accumulated in registers.

#[cfg(target_arch = "x86_64")]
use core::arch::x86_64::*;

/// Row counts the vector base case handles (multiples of 8 up to 64).
pub const fn supports_base(b: usize) -> bool {
    b.is_multiple_of(8) && b >= 8 && b <= 64
}

/// Base case of the word-level middle product; same contract as
/// [`super::portable::mp_base`], for `b = x.len()` a multiple of 8 in 8..=64.
///
/// # Safety
/// The CPU must support `vpclmulqdq` and `avx512f`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "vpclmulqdq,avx512f,pclmulqdq")]
pub unsafe fn mp_base(a: &[u64], x: &[u64], out: &mut [u64]) {
    let b = x.len();
    assert!(supports_base(b) && a.len() == 2 * b - 1 && out.len() == 2 * b);
    match b / 8 {
        1 => mp_groups::<1>(a, x, out),
        2 => mp_groups::<2>(a, x, out),
        3 => mp_groups::<3>(a, x, out),
        4 => mp_groups::<4>(a, x, out),
        5 => mp_groups::<5>(a, x, out),
        6 => mp_groups::<6>(a, x, out),
        7 => mp_groups::<7>(a, x, out),
        _ => mp_groups::<8>(a, x, out),
    }
}

/// G groups of 8 rows. For a fixed column j, rows `8g .. 8g + 8` need
/// `a[8g + b - 1 - j ..][..8]`: one 512-bit load. Selector 0x00 multiplies the
/// even qwords (rows 8g, 8g+2, 8g+4, 8g+6), selector 0x01 the odd ones, each by
/// x[j] broadcast; each 128-bit lane accumulates one row.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "vpclmulqdq,avx512f,pclmulqdq")]
#[inline]
unsafe fn mp_groups<const G: usize>(a: &[u64], x: &[u64], out: &mut [u64]) {
    let b = 8 * G;
    let mut even = [_mm512_setzero_si512(); G];
    let mut odd = [_mm512_setzero_si512(); G];
    let ap = a.as_ptr();
    for (j, &xj) in x.iter().enumerate() {
        let vx = _mm512_set1_epi64(xj as i64);
        for g in 0..G {
            // SAFETY: the highest index read is 8g + b - 1 - j + 7 <= 2b - 2.
            let va = _mm512_loadu_si512(ap.add(8 * g + b - 1 - j) as *const _);
            even[g] = _mm512_xor_si512(even[g], _mm512_clmulepi64_epi128(va, vx, 0x00));
            odd[g] = _mm512_xor_si512(odd[g], _mm512_clmulepi64_epi128(va, vx, 0x01));
        }
    }
    // Interleave lanes back into row order: rows 8g+0..3 are
    // (even.l0, odd.l0, even.l1, odd.l1), rows 8g+4..7 the next two lanes.
    let lo_idx = _mm512_set_epi64(11, 10, 3, 2, 9, 8, 1, 0);
    let hi_idx = _mm512_set_epi64(15, 14, 7, 6, 13, 12, 5, 4);
    let op = out.as_mut_ptr();
    for g in 0..G {
        let r0 = _mm512_permutex2var_epi64(even[g], lo_idx, odd[g]);
        let r1 = _mm512_permutex2var_epi64(even[g], hi_idx, odd[g]);
        let p0 = op.add(16 * g) as *mut __m512i;
        let p1 = op.add(16 * g + 8) as *mut __m512i;
        _mm512_storeu_si512(
            p0 as *mut _,
            _mm512_xor_si512(_mm512_loadu_si512(p0 as *const _), r0),
        );
        _mm512_storeu_si512(
            p1 as *mut _,
            _mm512_xor_si512(_mm512_loadu_si512(p1 as *const _), r1),
        );
    }
}

/// `dst[i] ^= src[i]` with 512-bit operations (tail handled scalar).
///
/// # Safety
/// The CPU must support `avx512f`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
pub unsafe fn xor_into(dst: &mut [u64], src: &[u64]) {
    let n = dst.len().min(src.len());
    let mut i = 0;
    while i + 8 <= n {
        let d = dst.as_mut_ptr().add(i) as *mut __m512i;
        let s = src.as_ptr().add(i) as *const __m512i;
        _mm512_storeu_si512(
            d as *mut _,
            _mm512_xor_si512(
                _mm512_loadu_si512(d as *const _),
                _mm512_loadu_si512(s as *const _),
            ),
        );
        i += 8;
    }
    while i < n {
        dst[i] ^= src[i];
        i += 1;
    }
}

/// `dst[i] = a[i] ^ b[i]` with 512-bit operations (tail handled scalar).
///
/// # Safety
/// The CPU must support `avx512f`.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "avx512f")]
pub unsafe fn xor3(dst: &mut [u64], a: &[u64], b: &[u64]) {
    let n = dst.len().min(a.len()).min(b.len());
    let mut i = 0;
    while i + 8 <= n {
        let va = _mm512_loadu_si512(a.as_ptr().add(i) as *const _);
        let vb = _mm512_loadu_si512(b.as_ptr().add(i) as *const _);
        _mm512_storeu_si512(dst.as_mut_ptr().add(i) as *mut _, _mm512_xor_si512(va, vb));
        i += 8;
    }
    while i < n {
        dst[i] = a[i] ^ b[i];
        i += 1;
    }
}

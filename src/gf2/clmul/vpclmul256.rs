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
    if b == 16 {
        mp16(a, x, out);
        return;
    }
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

/// The 16-word base case with one Karatsuba level done in registers
/// (`gf2::karatsuba` module docs: `P = MP(a1, x0 + x1)`,
/// `out0 = P + MP(a0 + a1, x1)`, `out1 = P + MP(a1 + a2, x0)`, h = 8): three
/// 8 x 8 middle products, 192 word products instead of 256. Each product of P
/// is added to both halves' accumulators, so 8 accumulators suffice.
#[cfg(target_arch = "x86_64")]
#[target_feature(enable = "vpclmulqdq,avx2,pclmulqdq")]
unsafe fn mp16(a: &[u64], x: &[u64], out: &mut [u64]) {
    debug_assert!(a.len() == 31 && x.len() == 16 && out.len() == 32);
    let mut tx = [0u64; 8];
    let mut s01 = [0u64; 15];
    let mut s12 = [0u64; 15];
    for j in 0..8 {
        tx[j] = x[j] ^ x[8 + j];
    }
    for i in 0..15 {
        s01[i] = a[i] ^ a[8 + i];
        s12[i] = a[8 + i] ^ a[16 + i];
    }
    // Accumulators: [half][group] for even and odd selectors; half 0 is
    // P + Q (rows 0..8), half 1 is P + R (rows 8..16).
    let z = _mm256_setzero_si256();
    let (mut e00, mut e01, mut e10, mut e11) = (z, z, z, z);
    let (mut o00, mut o01, mut o10, mut o11) = (z, z, z, z);
    let a1 = a.as_ptr().add(8 + 7);
    let q = s01.as_ptr().add(7);
    let r = s12.as_ptr().add(7);
    for j in 0..8 {
        // SAFETY (all loads): rows 4g .. 4g + 4 of an 8-row middle product
        // read A[4g + 7 - j .. 4g + 11 - j], within 0 .. 15 for g < 2, j < 8.
        let vt = _mm256_set1_epi64x(tx[j] as i64);
        let v1 = _mm256_set1_epi64x(x[8 + j] as i64);
        let v0 = _mm256_set1_epi64x(x[j] as i64);
        let p0 = _mm256_loadu_si256(a1.sub(j) as *const __m256i);
        let p1 = _mm256_loadu_si256(a1.add(4).sub(j) as *const __m256i);
        let pe0 = _mm256_clmulepi64_epi128(p0, vt, 0x00);
        let po0 = _mm256_clmulepi64_epi128(p0, vt, 0x01);
        let pe1 = _mm256_clmulepi64_epi128(p1, vt, 0x00);
        let po1 = _mm256_clmulepi64_epi128(p1, vt, 0x01);
        let q0 = _mm256_loadu_si256(q.sub(j) as *const __m256i);
        let q1 = _mm256_loadu_si256(q.add(4).sub(j) as *const __m256i);
        e00 = _mm256_xor_si256(
            e00,
            _mm256_xor_si256(pe0, _mm256_clmulepi64_epi128(q0, v1, 0x00)),
        );
        o00 = _mm256_xor_si256(
            o00,
            _mm256_xor_si256(po0, _mm256_clmulepi64_epi128(q0, v1, 0x01)),
        );
        e01 = _mm256_xor_si256(
            e01,
            _mm256_xor_si256(pe1, _mm256_clmulepi64_epi128(q1, v1, 0x00)),
        );
        o01 = _mm256_xor_si256(
            o01,
            _mm256_xor_si256(po1, _mm256_clmulepi64_epi128(q1, v1, 0x01)),
        );
        let r0 = _mm256_loadu_si256(r.sub(j) as *const __m256i);
        let r1 = _mm256_loadu_si256(r.add(4).sub(j) as *const __m256i);
        e10 = _mm256_xor_si256(
            e10,
            _mm256_xor_si256(pe0, _mm256_clmulepi64_epi128(r0, v0, 0x00)),
        );
        o10 = _mm256_xor_si256(
            o10,
            _mm256_xor_si256(po0, _mm256_clmulepi64_epi128(r0, v0, 0x01)),
        );
        e11 = _mm256_xor_si256(
            e11,
            _mm256_xor_si256(pe1, _mm256_clmulepi64_epi128(r1, v0, 0x00)),
        );
        o11 = _mm256_xor_si256(
            o11,
            _mm256_xor_si256(po1, _mm256_clmulepi64_epi128(r1, v0, 0x01)),
        );
    }
    // Row order within a group: (even.lane0, odd.lane0, even.lane1, odd.lane1).
    let op = out.as_mut_ptr();
    for (k, (e, o)) in [(e00, o00), (e01, o01), (e10, o10), (e11, o11)]
        .into_iter()
        .enumerate()
    {
        let w0 = _mm256_permute2x128_si256(e, o, 0x20);
        let w1 = _mm256_permute2x128_si256(e, o, 0x31);
        let d0 = op.add(8 * k) as *mut __m256i;
        let d1 = op.add(8 * k + 4) as *mut __m256i;
        _mm256_storeu_si256(d0, _mm256_xor_si256(_mm256_loadu_si256(d0), w0));
        _mm256_storeu_si256(d1, _mm256_xor_si256(_mm256_loadu_si256(d1), w1));
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

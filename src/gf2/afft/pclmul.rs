//! PCLMULQDQ kernel on 128-bit registers: two GF(2^64) elements per
//! register, two carry-less products per pair of PCLMULQDQ instructions.
//! For x86-64 CPUs without VPCLMULQDQ. Same results as
//! [`super::kernel::Portable`]; the tests compare them on random inputs.
//!
//! # The product
//!
//! With `a = (a0, a1)` and `b = (b0, b1)` in one register each, PCLMULQDQ
//! with selectors `0x00` and `0x11` gives the 128-bit products
//! `p_i = hi_i z^64 + lo_i`; `unpacklo/hi` gather `(lo_0, lo_1)` and
//! `(hi_0, hi_1)`, and the reduction modulo `P = z^64 + z^4 + z^3 + z + 1`
//! is that of [`super::gf64::reduce`] on both lanes at once, in fewer
//! operations: `hi z^64 = hi c` with `c = z^4 + z^3 + z + 1`; the bits of
//! `hi c` above `z^64` are `hi >> 61 ^ hi >> 60` (`gf64::reduce` also has
//! `hi >> 63`, which is zero here: a product of two elements has degree at
//! most 126, so `hi` has degree at most 62), and they fold in as `h = hi ^ hi >> 61 ^ hi >> 60`; then, as
//! `c = (1 + z)(1 + z^3)` and truncation to 64 bits commutes with products,
//! `low64(h c) = k ^ k << 3` with `k = h ^ h << 1`. Four shifts and five
//! XORs per register.
//!
//! The reduction could also be done by carry-less products with `c`
//! (`t_i = hi_i c`, of degree at most 66, then `high64(t_i) c`, of degree at
//! most 6: two more PCLMULQDQ per element). Measured on the development
//! machine (AMD EPYC, Zen 4) in a loop of independent products, that took 1.6x
//! the time of the shifts with 128-bit registers and 1.5x with 256-bit ones
//! (PCLMULQDQ is the port both compete for; shifts and XORs have more), so
//! the kernels use shifts.

use super::gf64::{self, Points};
use super::kernel::{block_by_levels, twiddle, Bfly, Kern};
use super::x86::{kind_code, FFT, FFT_T, IFFT, IFFT_T};
use crate::gf2::Backend;
use core::arch::x86_64::*;

/// The PCLMULQDQ kernel. Exists only where [`Backend::Pclmul`] is
/// supported (checked in [`Pclmul::new`]).
#[derive(Clone, Copy, Debug)]
pub struct Pclmul {
    _detected: (),
}

impl Pclmul {
    /// The kernel, if this CPU runs it.
    pub fn new() -> Option<Pclmul> {
        Backend::Pclmul
            .is_supported()
            .then_some(Pclmul { _detected: () })
    }
}

impl Kern for Pclmul {
    fn bfly(self, kind: Bfly, a: &mut [u64], b: &mut [u64], l: u64) {
        assert_eq!(a.len(), b.len(), "butterfly halves differ in length");
        // SAFETY: a Pclmul value exists only if detection succeeded (new()).
        unsafe {
            match kind_code(kind) {
                FFT => bfly_slices::<FFT>(a, b, l),
                IFFT => bfly_slices::<IFFT>(a, b, l),
                FFT_T => bfly_slices::<FFT_T>(a, b, l),
                _ => bfly_slices::<IFFT_T>(a, b, l),
            }
        }
    }

    fn mul_assign(self, acc: &mut [u64], x: &[u64]) {
        assert_eq!(acc.len(), x.len(), "pointwise product: lengths differ");
        // SAFETY: detected in new().
        unsafe { mul_slices::<false>(acc, x, x) }
    }

    fn mul_acc(self, acc: &mut [u64], x: &[u64], y: &[u64]) {
        assert!(acc.len() == x.len() && x.len() == y.len());
        // SAFETY: detected in new().
        unsafe { mul_slices::<true>(acc, x, y) }
    }

    fn xor_into(self, dst: &mut [u64], src: &[u64]) {
        assert_eq!(dst.len(), src.len(), "xor: lengths differ");
        // SAFETY: detected in new().
        unsafe { xor_slices(dst, src) }
    }

    fn block(self, kind: Bfly, f: &mut [u64], pos: usize) {
        let len = f.len();
        if len < 16 {
            return block_by_levels(self, kind, f, pos);
        }
        let top_down = matches!(kind, Bfly::Fft | Bfly::IfftT);
        let levels = len.trailing_zeros();
        let wide = |f: &mut [u64], level: u32| {
            let h = 1usize << level;
            for (j, blk) in f.chunks_exact_mut(2 * h).enumerate() {
                let p = pos + 2 * h * j;
                let (a, b) = blk.split_at_mut(h);
                self.bfly(kind, a, b, twiddle(p, level));
            }
        };
        // SAFETY (both calls below): detected in new().
        let small = |f: &mut [u64]| unsafe {
            match kind_code(kind) {
                FFT => small_groups::<FFT>(f, pos),
                IFFT => small_groups::<IFFT>(f, pos),
                FFT_T => small_groups::<FFT_T>(f, pos),
                _ => small_groups::<IFFT_T>(f, pos),
            }
        };
        // Levels `level` and `level - 1` in one pass over f.
        let two = |f: &mut [u64], level: u32| {
            let q = 1usize << (level - 1);
            for (j, blk) in f.chunks_exact_mut(4 * q).enumerate() {
                let p = pos + 4 * q * j;
                let t = [
                    twiddle(p, level),
                    twiddle(p, level - 1),
                    twiddle(p + 2 * q, level - 1),
                ];
                // SAFETY: detected in new(); blk has 4q elements, q >= 16.
                unsafe {
                    match kind_code(kind) {
                        FFT => bfly_two::<FFT>(blk, t),
                        IFFT => bfly_two::<IFFT>(blk, t),
                        FFT_T => bfly_two::<FFT_T>(blk, t),
                        _ => bfly_two::<IFFT_T>(blk, t),
                    }
                }
            }
        };
        if top_down {
            let mut level = levels;
            while level >= 6 {
                two(f, level - 1);
                level -= 2;
            }
            if level == 5 {
                wide(f, 4);
            }
            small(f);
        } else {
            small(f);
            let mut level = 4;
            while level + 1 < levels {
                two(f, level + 1);
                level += 2;
            }
            if level < levels {
                wide(f, level);
            }
        }
    }
}

/// Levels `L` and `L - 1` of kind `K` on a block of `4q` elements
/// (`q = 2^(L-1)`, a multiple of 2): quarters `Q_0 .. Q_3`, level L pairs
/// `(Q_0, Q_2)` and `(Q_1, Q_3)` with twiddle `t[0]`, level L - 1 pairs
/// `(Q_0, Q_1)` with `t[1]` and `(Q_2, Q_3)` with `t[2]`; top-down for
/// `Fft`/`IfftT`, bottom-up otherwise. One load and one store per element
/// for two levels.
#[target_feature(enable = "sse2,pclmulqdq")]
fn bfly_two<const K: u8>(blk: &mut [u64], t: [u64; 3]) {
    let q = blk.len() / 4;
    assert!(blk.len() == 4 * q && q.is_multiple_of(2));
    let lt = _mm_set1_epi64x(t[0] as i64);
    let la = _mm_set1_epi64x(t[1] as i64);
    let lb = _mm_set1_epi64x(t[2] as i64);
    let ptr = blk.as_mut_ptr();
    for i in (0..q).step_by(2) {
        // SAFETY: i + 2 <= q, so every access is inside blk.
        unsafe {
            let p = [
                ptr.add(i),
                ptr.add(q + i),
                ptr.add(2 * q + i),
                ptr.add(3 * q + i),
            ];
            let mut x = p.map(|a| _mm_loadu_si128(a as *const _));
            if K == FFT || K == IFFT_T {
                (x[0], x[2]) = bfly2::<K>(x[0], x[2], lt);
                (x[1], x[3]) = bfly2::<K>(x[1], x[3], lt);
                (x[0], x[1]) = bfly2::<K>(x[0], x[1], la);
                (x[2], x[3]) = bfly2::<K>(x[2], x[3], lb);
            } else {
                (x[0], x[1]) = bfly2::<K>(x[0], x[1], la);
                (x[2], x[3]) = bfly2::<K>(x[2], x[3], lb);
                (x[0], x[2]) = bfly2::<K>(x[0], x[2], lt);
                (x[1], x[3]) = bfly2::<K>(x[1], x[3], lt);
            }
            for (a, v) in p.into_iter().zip(x) {
                _mm_storeu_si128(a as *mut _, v);
            }
        }
    }
}

/// `omega_u` for `u < 16` (the offsets of twiddles inside a 16-element
/// group: `omega_(q + u) = omega_q ^ omega_u` when `q` is a multiple of 16).
pub(super) fn small_omegas(pts: &Points) -> [u64; 16] {
    core::array::from_fn(|u| pts.omega(u))
}

/// The field product of one pair of elements (for the tails of slices).
#[inline]
#[target_feature(enable = "sse2,pclmulqdq")]
pub(super) fn mul1(a: u64, b: u64) -> u64 {
    // SAFETY: the features clmul64 needs are enabled here.
    let (lo, hi) = unsafe { crate::gf2::clmul::pclmul::clmul64(a, b) };
    gf64::reduce(lo, hi)
}

/// `a * b` lane-wise for two pairs of elements (module docs).
#[inline]
#[target_feature(enable = "sse2,pclmulqdq")]
fn mul2(a: __m128i, b: __m128i) -> __m128i {
    let p0 = _mm_clmulepi64_si128(a, b, 0x00);
    let p1 = _mm_clmulepi64_si128(a, b, 0x11);
    let lo = _mm_unpacklo_epi64(p0, p1);
    let hi = _mm_unpackhi_epi64(p0, p1);
    // Module docs: h = hi + the bits of hi c above z^64; k = (1 + z) h;
    // r = lo + (1 + z^3) k.
    let h = _mm_xor_si128(
        hi,
        _mm_xor_si128(_mm_srli_epi64(hi, 61), _mm_srli_epi64(hi, 60)),
    );
    let k = _mm_xor_si128(h, _mm_slli_epi64(h, 1));
    _mm_xor_si128(lo, _mm_xor_si128(k, _mm_slli_epi64(k, 3)))
}

/// One butterfly of kind `K` on registers.
#[inline]
#[target_feature(enable = "sse2,pclmulqdq")]
fn bfly2<const K: u8>(a: __m128i, b: __m128i, l: __m128i) -> (__m128i, __m128i) {
    match K {
        FFT => {
            let a = _mm_xor_si128(a, mul2(b, l));
            (a, _mm_xor_si128(b, a))
        }
        IFFT => {
            let b = _mm_xor_si128(b, a);
            (_mm_xor_si128(a, mul2(b, l)), b)
        }
        FFT_T => {
            let a = _mm_xor_si128(a, b);
            (a, _mm_xor_si128(b, mul2(a, l)))
        }
        _ => {
            let b = _mm_xor_si128(b, mul2(a, l));
            (_mm_xor_si128(a, b), b)
        }
    }
}

/// One butterfly of kind `K` on one pair of elements (slice tails).
#[inline]
#[target_feature(enable = "sse2,pclmulqdq")]
pub(super) fn bfly1_pclmul<const K: u8>(a: &mut u64, b: &mut u64, l: u64) {
    match K {
        FFT => {
            *a ^= mul1(l, *b);
            *b ^= *a;
        }
        IFFT => {
            *b ^= *a;
            *a ^= mul1(l, *b);
        }
        FFT_T => {
            *a ^= *b;
            *b ^= mul1(l, *a);
        }
        _ => {
            *b ^= mul1(l, *a);
            *a ^= *b;
        }
    }
}

#[target_feature(enable = "sse2,pclmulqdq")]
fn bfly_slices<const K: u8>(a: &mut [u64], b: &mut [u64], l: u64) {
    let n2 = a.len() / 2 * 2;
    let lv = _mm_set1_epi64x(l as i64);
    let (pa, pb) = (a.as_mut_ptr(), b.as_mut_ptr());
    for i in (0..n2).step_by(2) {
        // SAFETY: i + 2 <= n2 <= len of both slices.
        unsafe {
            let x = _mm_loadu_si128(pa.add(i) as *const _);
            let y = _mm_loadu_si128(pb.add(i) as *const _);
            let (x, y) = bfly2::<K>(x, y, lv);
            _mm_storeu_si128(pa.add(i) as *mut _, x);
            _mm_storeu_si128(pb.add(i) as *mut _, y);
        }
    }
    for (x, y) in a[n2..].iter_mut().zip(b[n2..].iter_mut()) {
        bfly1_pclmul::<K>(x, y, l);
    }
}

#[target_feature(enable = "sse2,pclmulqdq")]
fn mul_slices<const ACC: bool>(acc: &mut [u64], x: &[u64], y: &[u64]) {
    let n2 = acc.len() / 2 * 2;
    let pa = acc.as_mut_ptr();
    for i in (0..n2).step_by(2) {
        // SAFETY: i + 2 <= n2 <= every length.
        unsafe {
            let vx = _mm_loadu_si128(x.as_ptr().add(i) as *const _);
            let va = _mm_loadu_si128(pa.add(i) as *const _);
            let r = if ACC {
                let vy = _mm_loadu_si128(y.as_ptr().add(i) as *const _);
                _mm_xor_si128(va, mul2(vx, vy))
            } else {
                mul2(va, vx)
            };
            _mm_storeu_si128(pa.add(i) as *mut _, r);
        }
    }
    for i in n2..acc.len() {
        if ACC {
            acc[i] ^= mul1(x[i], y[i]);
        } else {
            acc[i] = mul1(acc[i], x[i]);
        }
    }
}

#[target_feature(enable = "sse2")]
fn xor_slices(dst: &mut [u64], src: &[u64]) {
    let n2 = dst.len() / 2 * 2;
    let pd = dst.as_mut_ptr();
    for i in (0..n2).step_by(2) {
        // SAFETY: i + 2 <= n2 <= both lengths.
        unsafe {
            let a = _mm_loadu_si128(pd.add(i) as *const _);
            let b = _mm_loadu_si128(src.as_ptr().add(i) as *const _);
            _mm_storeu_si128(pd.add(i) as *mut _, _mm_xor_si128(a, b));
        }
    }
    for i in n2..dst.len() {
        dst[i] ^= src[i];
    }
}

/// The 16-element groups of `f` (at global position `pos`, a multiple of
/// 16) through [`small16`], with the twiddle offsets built once.
#[target_feature(enable = "sse2,pclmulqdq")]
fn small_groups<const K: u8>(f: &mut [u64], pos: usize) {
    let pts = Points::get();
    let w = small_omegas(pts);
    // Level 0's lane offsets (w[4i], w[4i + 2]) (see small16).
    let w0: [__m128i; 4] = core::array::from_fn(|i| pair(w[4 * i], w[4 * i + 2]));
    for (j, c) in f.chunks_exact_mut(16).enumerate() {
        let p = pos + 16 * j;
        let t = [
            pts.omega(p),
            pts.omega(p >> 1),
            pts.omega(p >> 2),
            pts.omega(p >> 3),
        ];
        small16::<K>(c, t, &w, &w0);
    }
}

/// `(x, y)` as a register, x in the low lane.
#[inline]
#[target_feature(enable = "sse2")]
fn pair(x: u64, y: u64) -> __m128i {
    _mm_set_epi64x(y as i64, x as i64)
}

/// Levels 3, 2, 1 and 0 on 16 elements at a position p (a multiple of 16),
/// `t[L] = omega_(p >> L)`, `w[u] = omega_u`, `w0[i] = (w[4i], w[4i + 2])`.
/// Register `R_i` holds elements `2i, 2i + 1`. The block of level L holding element e starts at
/// `q = p + (e & !(2^(L+1) - 1))`, so its twiddle is
/// `omega_(q >> L) = t[L] ^ w[2 (e >> (L + 1))]`:
///
/// | level | pairs | twiddle |
/// |---|---|---|
/// | 3 | `(R_i, R_(i+4))` | `t[3]` |
/// | 2 | `(R_i, R_(i+2))`, i = 0, 1, 4, 5 | `t[2] ^ w[2 (i / 4)]` |
/// | 1 | `(R_(2j), R_(2j+1))` | `t[1] ^ w[2 j]` |
/// | 0 | the lanes of `R_j`, regrouped by `unpacklo/hi` of `R_(2i)`, `R_(2i+1)` | `t[0] ^ w[2 j]` |
#[inline]
#[target_feature(enable = "sse2,pclmulqdq")]
fn small16<const K: u8>(c: &mut [u64], t: [u64; 4], w: &[u64; 16], w0: &[__m128i; 4]) {
    assert_eq!(c.len(), 16);
    let ptr = c.as_mut_ptr();
    let mut r = [_mm_setzero_si128(); 8];
    for (i, v) in r.iter_mut().enumerate() {
        // SAFETY: c has 16 elements.
        *v = unsafe { _mm_loadu_si128(ptr.add(2 * i) as *const _) };
    }
    let level3 = |r: &mut [__m128i; 8]| {
        let l = _mm_set1_epi64x(t[3] as i64);
        for i in 0..4 {
            (r[i], r[i + 4]) = bfly2::<K>(r[i], r[i + 4], l);
        }
    };
    let level2 = |r: &mut [__m128i; 8]| {
        for (i, g) in [(0usize, 0usize), (1, 0), (4, 1), (5, 1)] {
            let l = _mm_set1_epi64x((t[2] ^ w[2 * g]) as i64);
            (r[i], r[i + 2]) = bfly2::<K>(r[i], r[i + 2], l);
        }
    };
    let level1 = |r: &mut [__m128i; 8]| {
        for j in 0..4 {
            let l = _mm_set1_epi64x((t[1] ^ w[2 * j]) as i64);
            (r[2 * j], r[2 * j + 1]) = bfly2::<K>(r[2 * j], r[2 * j + 1], l);
        }
    };
    let level0 = |r: &mut [__m128i; 8]| {
        let t0 = _mm_set1_epi64x(t[0] as i64);
        for i in 0..4 {
            // Elements 4i, 4i + 2 in a; 4i + 1, 4i + 3 in b.
            let a = _mm_unpacklo_epi64(r[2 * i], r[2 * i + 1]);
            let b = _mm_unpackhi_epi64(r[2 * i], r[2 * i + 1]);
            let l = _mm_xor_si128(t0, w0[i]);
            let (a, b) = bfly2::<K>(a, b, l);
            r[2 * i] = _mm_unpacklo_epi64(a, b);
            r[2 * i + 1] = _mm_unpackhi_epi64(a, b);
        }
    };
    if K == FFT || K == IFFT_T {
        level3(&mut r);
        level2(&mut r);
        level1(&mut r);
        level0(&mut r);
    } else {
        level0(&mut r);
        level1(&mut r);
        level2(&mut r);
        level3(&mut r);
    }
    for (i, v) in r.iter().enumerate() {
        // SAFETY: c has 16 elements.
        unsafe { _mm_storeu_si128(ptr.add(2 * i) as *mut _, *v) };
    }
}

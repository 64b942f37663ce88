//! AVX2 + VPCLMULQDQ kernel on 256-bit registers: four GF(2^64) elements
//! per register, four carry-less products per pair of VPCLMULQDQ
//! instructions. For CPUs that have VPCLMULQDQ but not AVX-512 (e.g. AMD
//! Zen 3). Same results as [`super::kernel::Portable`]; the tests compare
//! them on random inputs.
//!
//! The product and its reduction are those of [`super::pclmul`], in each
//! 128-bit lane: selectors `0x00` and `0x11` give the products of the even
//! and the odd elements, `unpacklo/hi` (per 128-bit lane) gather the four
//! low and the four high halves in element order, and the reduction modulo
//! `P` is the one by shifts of [`super::pclmul`] on all four lanes.

use super::gf64::Points;
use super::kernel::{block_by_levels, twiddle, Bfly, Kern};
use super::pclmul::{bfly1_pclmul, mul1, small_omegas};
use super::x86::{kind_code, FFT, FFT_T, IFFT, IFFT_T};
use crate::gf2::Backend;
use core::arch::x86_64::*;

/// The AVX2 + VPCLMULQDQ kernel. Exists only where
/// [`Backend::Vpclmul256`] is supported (checked in [`Vpclmul256::new`]).
#[derive(Clone, Copy, Debug)]
pub struct Vpclmul256 {
    _detected: (),
}

impl Vpclmul256 {
    /// The kernel, if this CPU runs it.
    pub fn new() -> Option<Vpclmul256> {
        Backend::Vpclmul256
            .is_supported()
            .then_some(Vpclmul256 { _detected: () })
    }
}

impl Kern for Vpclmul256 {
    fn bfly(self, kind: Bfly, a: &mut [u64], b: &mut [u64], l: u64) {
        assert_eq!(a.len(), b.len(), "butterfly halves differ in length");
        // SAFETY: a Vpclmul256 value exists only if detection succeeded.
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
/// (`q = 2^(L-1)`, a multiple of 4): quarters `Q_0 .. Q_3`, level L pairs
/// `(Q_0, Q_2)` and `(Q_1, Q_3)` with twiddle `t[0]`, level L - 1 pairs
/// `(Q_0, Q_1)` with `t[1]` and `(Q_2, Q_3)` with `t[2]`; top-down for
/// `Fft`/`IfftT`, bottom-up otherwise. One load and one store per element
/// for two levels.
#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn bfly_two<const K: u8>(blk: &mut [u64], t: [u64; 3]) {
    let q = blk.len() / 4;
    assert!(blk.len() == 4 * q && q.is_multiple_of(4));
    let lt = _mm256_set1_epi64x(t[0] as i64);
    let la = _mm256_set1_epi64x(t[1] as i64);
    let lb = _mm256_set1_epi64x(t[2] as i64);
    let ptr = blk.as_mut_ptr();
    for i in (0..q).step_by(4) {
        // SAFETY: i + 4 <= q, so every access is inside blk.
        unsafe {
            let p = [
                ptr.add(i),
                ptr.add(q + i),
                ptr.add(2 * q + i),
                ptr.add(3 * q + i),
            ];
            let mut x = p.map(|a| _mm256_loadu_si256(a as *const _));
            if K == FFT || K == IFFT_T {
                (x[0], x[2]) = bfly4::<K>(x[0], x[2], lt);
                (x[1], x[3]) = bfly4::<K>(x[1], x[3], lt);
                (x[0], x[1]) = bfly4::<K>(x[0], x[1], la);
                (x[2], x[3]) = bfly4::<K>(x[2], x[3], lb);
            } else {
                (x[0], x[1]) = bfly4::<K>(x[0], x[1], la);
                (x[2], x[3]) = bfly4::<K>(x[2], x[3], lb);
                (x[0], x[2]) = bfly4::<K>(x[0], x[2], lt);
                (x[1], x[3]) = bfly4::<K>(x[1], x[3], lt);
            }
            for (a, v) in p.into_iter().zip(x) {
                _mm256_storeu_si256(a as *mut _, v);
            }
        }
    }
}

/// `a * b` lane-wise for four pairs of elements (module docs).
#[inline]
#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn mul4(a: __m256i, b: __m256i) -> __m256i {
    let p0 = _mm256_clmulepi64_epi128(a, b, 0x00);
    let p1 = _mm256_clmulepi64_epi128(a, b, 0x11);
    let lo = _mm256_unpacklo_epi64(p0, p1);
    let hi = _mm256_unpackhi_epi64(p0, p1);
    // The reduction of super::pclmul (module docs there), lane-wise.
    let h = _mm256_xor_si256(
        hi,
        _mm256_xor_si256(_mm256_srli_epi64(hi, 61), _mm256_srli_epi64(hi, 60)),
    );
    let k = _mm256_xor_si256(h, _mm256_slli_epi64(h, 1));
    _mm256_xor_si256(lo, _mm256_xor_si256(k, _mm256_slli_epi64(k, 3)))
}

/// One butterfly of kind `K` on registers.
#[inline]
#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn bfly4<const K: u8>(a: __m256i, b: __m256i, l: __m256i) -> (__m256i, __m256i) {
    match K {
        FFT => {
            let a = _mm256_xor_si256(a, mul4(b, l));
            (a, _mm256_xor_si256(b, a))
        }
        IFFT => {
            let b = _mm256_xor_si256(b, a);
            (_mm256_xor_si256(a, mul4(b, l)), b)
        }
        FFT_T => {
            let a = _mm256_xor_si256(a, b);
            (a, _mm256_xor_si256(b, mul4(a, l)))
        }
        _ => {
            let b = _mm256_xor_si256(b, mul4(a, l));
            (_mm256_xor_si256(a, b), b)
        }
    }
}

#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn bfly_slices<const K: u8>(a: &mut [u64], b: &mut [u64], l: u64) {
    let n4 = a.len() / 4 * 4;
    let lv = _mm256_set1_epi64x(l as i64);
    let (pa, pb) = (a.as_mut_ptr(), b.as_mut_ptr());
    for i in (0..n4).step_by(4) {
        // SAFETY: i + 4 <= n4 <= len of both slices.
        unsafe {
            let x = _mm256_loadu_si256(pa.add(i) as *const _);
            let y = _mm256_loadu_si256(pb.add(i) as *const _);
            let (x, y) = bfly4::<K>(x, y, lv);
            _mm256_storeu_si256(pa.add(i) as *mut _, x);
            _mm256_storeu_si256(pb.add(i) as *mut _, y);
        }
    }
    for (x, y) in a[n4..].iter_mut().zip(b[n4..].iter_mut()) {
        bfly1_pclmul::<K>(x, y, l);
    }
}

#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn mul_slices<const ACC: bool>(acc: &mut [u64], x: &[u64], y: &[u64]) {
    let n4 = acc.len() / 4 * 4;
    let pa = acc.as_mut_ptr();
    for i in (0..n4).step_by(4) {
        // SAFETY: i + 4 <= n4 <= every length.
        unsafe {
            let vx = _mm256_loadu_si256(x.as_ptr().add(i) as *const _);
            let va = _mm256_loadu_si256(pa.add(i) as *const _);
            let r = if ACC {
                let vy = _mm256_loadu_si256(y.as_ptr().add(i) as *const _);
                _mm256_xor_si256(va, mul4(vx, vy))
            } else {
                mul4(va, vx)
            };
            _mm256_storeu_si256(pa.add(i) as *mut _, r);
        }
    }
    for i in n4..acc.len() {
        if ACC {
            acc[i] ^= mul1(x[i], y[i]);
        } else {
            acc[i] = mul1(acc[i], x[i]);
        }
    }
}

#[target_feature(enable = "avx2")]
fn xor_slices(dst: &mut [u64], src: &[u64]) {
    let n4 = dst.len() / 4 * 4;
    let pd = dst.as_mut_ptr();
    for i in (0..n4).step_by(4) {
        // SAFETY: i + 4 <= n4 <= both lengths.
        unsafe {
            let a = _mm256_loadu_si256(pd.add(i) as *const _);
            let b = _mm256_loadu_si256(src.as_ptr().add(i) as *const _);
            _mm256_storeu_si256(pd.add(i) as *mut _, _mm256_xor_si256(a, b));
        }
    }
    for i in n4..dst.len() {
        dst[i] ^= src[i];
    }
}

/// The twiddle offsets of levels 1 and 0 of [`small16`], by lane.
struct Offsets {
    /// `(w[4i], w[4i], w[4i + 2], w[4i + 2])`.
    l1: [__m256i; 2],
    /// `(w[8i], w[8i + 4], w[8i + 2], w[8i + 6])`.
    l0: [__m256i; 2],
}

/// The 16-element groups of `f` (at global position `pos`, a multiple of
/// 16) through [`small16`], with the twiddle offsets built once.
#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn small_groups<const K: u8>(f: &mut [u64], pos: usize) {
    let pts = Points::get();
    let w = small_omegas(pts);
    let off = Offsets {
        l1: core::array::from_fn(|i| quad([w[4 * i], w[4 * i], w[4 * i + 2], w[4 * i + 2]])),
        l0: core::array::from_fn(|i| quad([w[8 * i], w[8 * i + 4], w[8 * i + 2], w[8 * i + 6]])),
    };
    for (j, c) in f.chunks_exact_mut(16).enumerate() {
        let p = pos + 16 * j;
        let t = [
            pts.omega(p),
            pts.omega(p >> 1),
            pts.omega(p >> 2),
            pts.omega(p >> 3),
        ];
        small16::<K>(c, t, &w, &off);
    }
}

/// `(x0, x1, x2, x3)` as a register, x0 in the lowest lane.
#[inline]
#[target_feature(enable = "avx2")]
fn quad(x: [u64; 4]) -> __m256i {
    _mm256_set_epi64x(x[3] as i64, x[2] as i64, x[1] as i64, x[0] as i64)
}

/// Levels 3, 2, 1 and 0 on 16 elements at a position p (a multiple of 16),
/// `t[L] = omega_(p >> L)`, `w[u] = omega_u`. Register `R_i` holds elements
/// `4i .. 4i + 3`; the twiddle of element e's block at level L is
/// `t[L] ^ w[2 (e >> (L + 1))]` (as in [`super::pclmul`]):
///
/// | level | pairs | lanes of a |
/// |---|---|---|
/// | 3 | `(R_0, R_2)`, `(R_1, R_3)` | all in one block |
/// | 2 | `(R_0, R_1)`, `(R_2, R_3)` | all in one block |
/// | 1 | 128-bit halves of `R_(2i)`, `R_(2i+1)` (`permute2x128`) | `4i, 4i+1, 4i+4, 4i+5` |
/// | 0 | qwords of `R_(2i)`, `R_(2i+1)` (`unpacklo/hi`) | `8i, 8i+4, 8i+2, 8i+6` |
#[inline]
#[target_feature(enable = "avx2,vpclmulqdq,pclmulqdq")]
fn small16<const K: u8>(c: &mut [u64], t: [u64; 4], w: &[u64; 16], off: &Offsets) {
    assert_eq!(c.len(), 16);
    let ptr = c.as_mut_ptr();
    let mut r = [_mm256_setzero_si256(); 4];
    for (i, v) in r.iter_mut().enumerate() {
        // SAFETY: c has 16 elements.
        *v = unsafe { _mm256_loadu_si256(ptr.add(4 * i) as *const _) };
    }
    let level3 = |r: &mut [__m256i; 4]| {
        let l = _mm256_set1_epi64x(t[3] as i64);
        for i in 0..2 {
            (r[i], r[i + 2]) = bfly4::<K>(r[i], r[i + 2], l);
        }
    };
    let level2 = |r: &mut [__m256i; 4]| {
        for i in 0..2 {
            let l = _mm256_set1_epi64x((t[2] ^ w[2 * i]) as i64);
            (r[2 * i], r[2 * i + 1]) = bfly4::<K>(r[2 * i], r[2 * i + 1], l);
        }
    };
    let level1 = |r: &mut [__m256i; 4]| {
        for i in 0..2 {
            // a: elements 8i, 8i+1, 8i+4, 8i+5 (blocks 2i, 2i+1).
            let a = _mm256_permute2x128_si256(r[2 * i], r[2 * i + 1], 0x20);
            let b = _mm256_permute2x128_si256(r[2 * i], r[2 * i + 1], 0x31);
            let l = _mm256_xor_si256(_mm256_set1_epi64x(t[1] as i64), off.l1[i]);
            let (a, b) = bfly4::<K>(a, b, l);
            r[2 * i] = _mm256_permute2x128_si256(a, b, 0x20);
            r[2 * i + 1] = _mm256_permute2x128_si256(a, b, 0x31);
        }
    };
    let level0 = |r: &mut [__m256i; 4]| {
        for i in 0..2 {
            // a: elements 8i, 8i+4 | 8i+2, 8i+6 (blocks 4i, 4i+2, 4i+1, 4i+3).
            let a = _mm256_unpacklo_epi64(r[2 * i], r[2 * i + 1]);
            let b = _mm256_unpackhi_epi64(r[2 * i], r[2 * i + 1]);
            let l = _mm256_xor_si256(_mm256_set1_epi64x(t[0] as i64), off.l0[i]);
            let (a, b) = bfly4::<K>(a, b, l);
            r[2 * i] = _mm256_unpacklo_epi64(a, b);
            r[2 * i + 1] = _mm256_unpackhi_epi64(a, b);
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
        unsafe { _mm256_storeu_si256(ptr.add(4 * i) as *mut _, *v) };
    }
}

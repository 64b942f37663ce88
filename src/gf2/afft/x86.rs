//! AVX-512 kernels: eight GF(2^64) elements per register, four carry-less
//! products per VPCLMULQDQ. Same results as [`super::kernel::Portable`]; the
//! tests compare them.

use super::gf64::Points;
use super::kernel::{bfly1, block_by_levels, twiddle, Bfly, Kern};
use crate::gf2::Backend;
use core::arch::x86_64::*;

/// The AVX-512 + VPCLMULQDQ kernel. Exists only where
/// [`Backend::Vpclmul`] is supported (checked in [`Avx512::new`]).
#[derive(Clone, Copy, Debug)]
pub struct Avx512 {
    _detected: (),
}

impl Avx512 {
    /// The kernel, if this CPU runs it.
    pub fn new() -> Option<Avx512> {
        Backend::Vpclmul
            .is_supported()
            .then_some(Avx512 { _detected: () })
    }
}

/// [`Bfly`] as a const-generic parameter of the x86 kernels.
pub(super) const FFT: u8 = 0;
pub(super) const IFFT: u8 = 1;
pub(super) const FFT_T: u8 = 2;
pub(super) const IFFT_T: u8 = 3;

/// The code of a butterfly kind.
pub(super) fn kind_code(kind: Bfly) -> u8 {
    match kind {
        Bfly::Fft => FFT,
        Bfly::Ifft => IFFT,
        Bfly::FftT => FFT_T,
        Bfly::IfftT => IFFT_T,
    }
}

impl Kern for Avx512 {
    fn bfly(self, kind: Bfly, a: &mut [u64], b: &mut [u64], l: u64) {
        assert_eq!(a.len(), b.len(), "butterfly halves differ in length");
        // SAFETY: an Avx512 value exists only if detection succeeded (new()).
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
        let pts = Points::get();
        let small = |f: &mut [u64]| {
            for (j, c) in f.chunks_exact_mut(16).enumerate() {
                let p = pos + 16 * j;
                let t = [pts.omega(p), pts.omega(p >> 1), pts.omega(p >> 2)];
                // SAFETY: detected in new(); c has 16 elements.
                unsafe {
                    match kind_code(kind) {
                        FFT => small16::<FFT>(c, t),
                        IFFT => small16::<IFFT>(c, t),
                        FFT_T => small16::<FFT_T>(c, t),
                        _ => small16::<IFFT_T>(c, t),
                    }
                }
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
                // SAFETY: detected in new(); blk has 4q elements, q >= 8.
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
            while level >= 5 {
                two(f, level - 1);
                level -= 2;
            }
            if level == 4 {
                wide(f, 3);
            }
            small(f);
        } else {
            small(f);
            let mut level = 3;
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
/// (`q = 2^(L-1)`, a multiple of 8): quarters `Q_0 .. Q_3`, level L pairs
/// `(Q_0, Q_2)` and `(Q_1, Q_3)` with twiddle `t[0]`, level L - 1 pairs
/// `(Q_0, Q_1)` with `t[1]` and `(Q_2, Q_3)` with `t[2]`; top-down for
/// `Fft`/`IfftT`, bottom-up otherwise. One load and one store per element
/// for two levels.
#[target_feature(enable = "avx512f,vpclmulqdq")]
fn bfly_two<const K: u8>(blk: &mut [u64], t: [u64; 3]) {
    let q = blk.len() / 4;
    assert!(blk.len() == 4 * q && q.is_multiple_of(8));
    let lt = _mm512_set1_epi64(t[0] as i64);
    let la = _mm512_set1_epi64(t[1] as i64);
    let lb = _mm512_set1_epi64(t[2] as i64);
    let ptr = blk.as_mut_ptr();
    for i in (0..q).step_by(8) {
        // SAFETY: i + 8 <= q, so every access is inside blk.
        unsafe {
            let p = [
                ptr.add(i),
                ptr.add(q + i),
                ptr.add(2 * q + i),
                ptr.add(3 * q + i),
            ];
            let mut x = p.map(|a| _mm512_loadu_si512(a as *const _));
            if K == FFT || K == IFFT_T {
                (x[0], x[2]) = bfly8::<K>(x[0], x[2], lt);
                (x[1], x[3]) = bfly8::<K>(x[1], x[3], lt);
                (x[0], x[1]) = bfly8::<K>(x[0], x[1], la);
                (x[2], x[3]) = bfly8::<K>(x[2], x[3], lb);
            } else {
                (x[0], x[1]) = bfly8::<K>(x[0], x[1], la);
                (x[2], x[3]) = bfly8::<K>(x[2], x[3], lb);
                (x[0], x[2]) = bfly8::<K>(x[0], x[2], lt);
                (x[1], x[3]) = bfly8::<K>(x[1], x[3], lt);
            }
            for (a, v) in p.into_iter().zip(x) {
                _mm512_storeu_si512(a as *mut _, v);
            }
        }
    }
}

#[inline]
#[target_feature(enable = "avx512f")]
fn xor3(a: __m512i, b: __m512i, c: __m512i) -> __m512i {
    _mm512_ternarylogic_epi64(a, b, c, 0x96)
}

/// `a * l` for eight pairs of elements (lane-wise).
#[inline]
#[target_feature(enable = "avx512f,vpclmulqdq")]
fn mul8(a: __m512i, l: __m512i) -> __m512i {
    let p0 = _mm512_clmulepi64_epi128(a, l, 0x00);
    let p1 = _mm512_clmulepi64_epi128(a, l, 0x11);
    let lo = _mm512_unpacklo_epi64(p0, p1);
    let hi = _mm512_unpackhi_epi64(p0, p1);
    // The reduction of super::pclmul (module docs there), lane-wise.
    let h = xor3(hi, _mm512_srli_epi64(hi, 61), _mm512_srli_epi64(hi, 60));
    let k = _mm512_xor_si512(h, _mm512_slli_epi64(h, 1));
    xor3(lo, k, _mm512_slli_epi64(k, 3))
}

/// One butterfly of kind `K` on registers.
#[inline]
#[target_feature(enable = "avx512f,vpclmulqdq")]
fn bfly8<const K: u8>(a: __m512i, b: __m512i, l: __m512i) -> (__m512i, __m512i) {
    match K {
        FFT => {
            let a = _mm512_xor_si512(a, mul8(b, l));
            (a, _mm512_xor_si512(b, a))
        }
        IFFT => {
            let b = _mm512_xor_si512(b, a);
            (_mm512_xor_si512(a, mul8(b, l)), b)
        }
        FFT_T => {
            let a = _mm512_xor_si512(a, b);
            (a, _mm512_xor_si512(b, mul8(a, l)))
        }
        _ => {
            let b = _mm512_xor_si512(b, mul8(a, l));
            (_mm512_xor_si512(a, b), b)
        }
    }
}

#[target_feature(enable = "avx512f,vpclmulqdq")]
fn bfly_slices<const K: u8>(a: &mut [u64], b: &mut [u64], l: u64) {
    let n8 = a.len() / 8 * 8;
    let lv = _mm512_set1_epi64(l as i64);
    let (pa, pb) = (a.as_mut_ptr(), b.as_mut_ptr());
    for i in (0..n8).step_by(8) {
        // SAFETY: i + 8 <= n8 <= len of both slices.
        unsafe {
            let x = _mm512_loadu_si512(pa.add(i) as *const _);
            let y = _mm512_loadu_si512(pb.add(i) as *const _);
            let (x, y) = bfly8::<K>(x, y, lv);
            _mm512_storeu_si512(pa.add(i) as *mut _, x);
            _mm512_storeu_si512(pb.add(i) as *mut _, y);
        }
    }
    let kind = match K {
        FFT => Bfly::Fft,
        IFFT => Bfly::Ifft,
        FFT_T => Bfly::FftT,
        _ => Bfly::IfftT,
    };
    for (x, y) in a[n8..].iter_mut().zip(b[n8..].iter_mut()) {
        bfly1(kind, x, y, l);
    }
}

#[target_feature(enable = "avx512f,vpclmulqdq")]
fn mul_slices<const ACC: bool>(acc: &mut [u64], x: &[u64], y: &[u64]) {
    let n8 = acc.len() / 8 * 8;
    let pa = acc.as_mut_ptr();
    for i in (0..n8).step_by(8) {
        // SAFETY: i + 8 <= n8 <= every length.
        unsafe {
            let vx = _mm512_loadu_si512(x.as_ptr().add(i) as *const _);
            let va = _mm512_loadu_si512(pa.add(i) as *const _);
            let r = if ACC {
                let vy = _mm512_loadu_si512(y.as_ptr().add(i) as *const _);
                _mm512_xor_si512(va, mul8(vx, vy))
            } else {
                mul8(va, vx)
            };
            _mm512_storeu_si512(pa.add(i) as *mut _, r);
        }
    }
    for i in n8..acc.len() {
        if ACC {
            acc[i] ^= super::gf64::mul(x[i], y[i]);
        } else {
            acc[i] = super::gf64::mul(acc[i], x[i]);
        }
    }
}

#[target_feature(enable = "avx512f")]
fn xor_slices(dst: &mut [u64], src: &[u64]) {
    let n8 = dst.len() / 8 * 8;
    let pd = dst.as_mut_ptr();
    for i in (0..n8).step_by(8) {
        // SAFETY: i + 8 <= n8 <= both lengths.
        unsafe {
            let a = _mm512_loadu_si512(pd.add(i) as *const _);
            let b = _mm512_loadu_si512(src.as_ptr().add(i) as *const _);
            _mm512_storeu_si512(pd.add(i) as *mut _, _mm512_xor_si512(a, b));
        }
    }
    for i in n8..dst.len() {
        dst[i] ^= src[i];
    }
}

/// Index vectors for `vpermt2q` between the layouts of [`small16`].
#[inline]
#[target_feature(enable = "avx512f")]
fn idx(i: [i64; 8]) -> __m512i {
    _mm512_set_epi64(i[7], i[6], i[5], i[4], i[3], i[2], i[1], i[0])
}

/// Levels 2, 1 and 0 on 16 elements at a position p (a multiple of 16),
/// `t = [omega_p, omega_(p/2), omega_(p/4)]`. Each level pairs lanes of two
/// registers A and B:
///
/// | level | A holds elements | B holds | twiddle of lane i |
/// |---|---|---|---|
/// | 2 | 0-3, 8-11 | 4-7, 12-15 | `omega_(p/4) ^ omega_(2 (i / 4))` |
/// | 1 | 0,1,4,5,8,9,12,13 | 2,3,6,7,... | `omega_(p/2) ^ omega_(2 (i / 2))` |
/// | 0 | evens | odds | `omega_p ^ omega_(2 i)` |
#[target_feature(enable = "avx512f,vpclmulqdq")]
fn small16<const K: u8>(c: &mut [u64], t: [u64; 3]) {
    assert_eq!(c.len(), 16);
    let pts = Points::get();
    let w = |i: usize| pts.omega(2 * i) as i64;
    let tw = |base: u64, lanes: [usize; 8]| {
        _mm512_xor_si512(_mm512_set1_epi64(base as i64), idx(lanes.map(&w)))
    };
    let l2 = tw(t[2], [0, 0, 0, 0, 1, 1, 1, 1]);
    let l1 = tw(t[1], [0, 0, 1, 1, 2, 2, 3, 3]);
    let l0 = tw(t[0], [0, 1, 2, 3, 4, 5, 6, 7]);
    let p2 = (
        idx([0, 1, 2, 3, 8, 9, 10, 11]),
        idx([4, 5, 6, 7, 12, 13, 14, 15]),
    );
    let p1 = (
        idx([0, 1, 8, 9, 4, 5, 12, 13]),
        idx([2, 3, 10, 11, 6, 7, 14, 15]),
    );
    let p0 = (
        idx([0, 8, 2, 10, 4, 12, 6, 14]),
        idx([1, 9, 3, 11, 5, 13, 7, 15]),
    );
    let pn = (
        idx([0, 8, 1, 9, 2, 10, 3, 11]),
        idx([4, 12, 5, 13, 6, 14, 7, 15]),
    );
    let pe = (
        idx([0, 2, 4, 6, 8, 10, 12, 14]),
        idx([1, 3, 5, 7, 9, 11, 13, 15]),
    );
    let perm = |x: __m512i, y: __m512i, p: (__m512i, __m512i)| {
        (
            _mm512_permutex2var_epi64(x, p.0, y),
            _mm512_permutex2var_epi64(x, p.1, y),
        )
    };
    let ptr = c.as_mut_ptr();
    // SAFETY: c has 16 elements.
    let (v0, v1) = unsafe {
        (
            _mm512_loadu_si512(ptr as *const _),
            _mm512_loadu_si512(ptr.add(8) as *const _),
        )
    };
    let (r0, r1) = if K == FFT || K == IFFT_T {
        let (a, b) = perm(v0, v1, p2);
        let (a, b) = bfly8::<K>(a, b, l2);
        let (a, b) = perm(a, b, p1);
        let (a, b) = bfly8::<K>(a, b, l1);
        let (a, b) = perm(a, b, p0);
        let (a, b) = bfly8::<K>(a, b, l0);
        perm(a, b, pn)
    } else {
        let (a, b) = perm(v0, v1, pe);
        let (a, b) = bfly8::<K>(a, b, l0);
        let (a, b) = perm(a, b, p0);
        let (a, b) = bfly8::<K>(a, b, l1);
        let (a, b) = perm(a, b, p1);
        let (a, b) = bfly8::<K>(a, b, l2);
        perm(a, b, p2)
    };
    // SAFETY: c has 16 elements.
    unsafe {
        _mm512_storeu_si512(ptr as *mut _, r0);
        _mm512_storeu_si512(ptr.add(8) as *mut _, r1);
    }
}

#[cfg(test)]
mod tests {
    use super::super::kernel::{Bfly, Kern, Portable};
    use super::*;

    fn rand_vec(seed: u64, len: usize) -> Vec<u64> {
        let mut s = seed | 1;
        (0..len)
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect()
    }

    #[test]
    fn avx512_matches_portable() {
        let Some(k) = Avx512::new() else {
            eprintln!("skipped: no AVX-512 VPCLMULQDQ on this CPU");
            return;
        };
        for kind in [Bfly::Fft, Bfly::Ifft, Bfly::FftT, Bfly::IfftT] {
            for len in [1usize, 2, 4, 8, 16, 32, 64, 256, 2048] {
                for pos in [0usize, len, 7 * len, (1 << 20) - len] {
                    let f = rand_vec((len + pos) as u64 ^ kind as u64, len);
                    let mut a = f.clone();
                    let mut b = f.clone();
                    k.block(kind, &mut a, pos);
                    Portable.block(kind, &mut b, pos);
                    assert_eq!(a, b, "{kind:?} len {len} pos {pos}");
                }
            }
            for len in [0usize, 1, 7, 8, 9, 31] {
                let (mut a1, mut b1) = (rand_vec(3, len), rand_vec(4, len));
                let (mut a2, mut b2) = (a1.clone(), b1.clone());
                k.bfly(kind, &mut a1, &mut b1, 0x1234_5678_9abc);
                Portable.bfly(kind, &mut a2, &mut b2, 0x1234_5678_9abc);
                assert_eq!((a1, b1), (a2, b2));
            }
        }
        for len in [0usize, 3, 8, 13, 64] {
            let (x, y) = (rand_vec(5, len), rand_vec(6, len));
            let mut a = rand_vec(7, len);
            let mut b = a.clone();
            k.mul_acc(&mut a, &x, &y);
            Portable.mul_acc(&mut b, &x, &y);
            assert_eq!(a, b);
            k.mul_assign(&mut a, &x);
            Portable.mul_assign(&mut b, &x);
            assert_eq!(a, b);
            k.xor_into(&mut a, &y);
            Portable.xor_into(&mut b, &y);
            assert_eq!(a, b);
        }
    }
}

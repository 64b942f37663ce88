//! The vector operations the transforms are built from, and the portable
//! implementation (the slow twin of the SIMD ones).
//!
//! Every operation works on whole slices, so one call does a lot of work and
//! the choice of backend is made once per call, not per element. The
//! butterflies are the four variants of the LCH butterfly (see
//! [`super::transform`]): with `a`, `b` the lower and upper halves of a block
//! and `l` its twiddle,
//!
//! | operation | effect | matrix on `(a, b)` |
//! |---|---|---|
//! | `fft` | `a ^= l b; b ^= a` | `[[1, l], [1, 1 + l]]` |
//! | `ifft` | `b ^= a; a ^= l b` | its inverse `[[1 + l, l], [1, 1]]` |
//! | `fft_t` | `a ^= b; b ^= l a` | the transpose `[[1, 1], [l, 1 + l]]` |
//! | `ifft_t` | `b ^= l a; a ^= b` | the inverse's transpose `[[1 + l, 1], [l, 1]]` |

use super::gf64;

/// Which butterfly (see the module docs).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Bfly {
    /// Forward transform.
    Fft,
    /// Inverse transform.
    Ifft,
    /// Transpose of the forward transform.
    FftT,
    /// Transpose of the inverse transform.
    IfftT,
}

/// Slice operations over GF(2^64) elements.
///
/// # Panics
/// Implementations panic if slices that must have equal lengths do not.
pub trait Kern: Copy + Send + Sync {
    /// One butterfly of kind `kind` with twiddle `l` on every pair
    /// `(a[i], b[i])`.
    fn bfly(self, kind: Bfly, a: &mut [u64], b: &mut [u64], l: u64);
    /// `acc[i] = acc[i] * x[i]` in GF(2^64).
    fn mul_assign(self, acc: &mut [u64], x: &[u64]);
    /// `acc[i] ^= x[i] * y[i]` in GF(2^64).
    fn mul_acc(self, acc: &mut [u64], x: &[u64], y: &[u64]);
    /// `dst[i] ^= src[i]`.
    fn xor_into(self, dst: &mut [u64], src: &[u64]);
    /// The butterflies of levels `top, top - 1, .., 0` of kind `kind` on a
    /// block of `2^(top + 1)` elements at global position `pos` (a multiple
    /// of the block length), top-down for `Fft`/`IfftT` and bottom-up for
    /// `Ifft`/`FftT`. The default does them one level at a time; SIMD
    /// kernels do the levels below one vector in registers.
    fn block(self, kind: Bfly, f: &mut [u64], pos: usize) {
        block_by_levels(self, kind, f, pos)
    }
}

/// Twiddle of level `level` for the block starting at global position `pos`:
/// `s_level(omega_pos) = omega_(pos >> level)` (Cantor basis; see
/// [`super::transform`]).
#[inline]
pub fn twiddle(pos: usize, level: u32) -> u64 {
    gf64::Points::get().omega(pos >> level)
}

/// [`Kern::block`] one level (and one block) at a time.
pub fn block_by_levels<K: Kern>(k: K, kind: Bfly, f: &mut [u64], pos: usize) {
    let len = f.len();
    debug_assert!(len.is_power_of_two() && pos.is_multiple_of(len));
    let top_down = matches!(kind, Bfly::Fft | Bfly::IfftT);
    let levels = len.trailing_zeros();
    let mut run = |level: u32| {
        let h = 1usize << level;
        for (j, blk) in f.chunks_exact_mut(2 * h).enumerate() {
            let p = pos + 2 * h * j;
            let (a, b) = blk.split_at_mut(h);
            k.bfly(kind, a, b, twiddle(p, level));
        }
    };
    if top_down {
        (0..levels).rev().for_each(&mut run);
    } else {
        (0..levels).for_each(&mut run);
    }
}

/// Plain Rust, one element at a time.
#[derive(Clone, Copy, Debug, Default)]
pub struct Portable;

/// One butterfly on one pair (the definition all kernels follow).
#[inline]
pub fn bfly1(kind: Bfly, a: &mut u64, b: &mut u64, l: u64) {
    match kind {
        Bfly::Fft => {
            *a ^= gf64::mul(l, *b);
            *b ^= *a;
        }
        Bfly::Ifft => {
            *b ^= *a;
            *a ^= gf64::mul(l, *b);
        }
        Bfly::FftT => {
            *a ^= *b;
            *b ^= gf64::mul(l, *a);
        }
        Bfly::IfftT => {
            *b ^= gf64::mul(l, *a);
            *a ^= *b;
        }
    }
}

impl Kern for Portable {
    fn bfly(self, kind: Bfly, a: &mut [u64], b: &mut [u64], l: u64) {
        assert_eq!(a.len(), b.len(), "butterfly halves differ in length");
        for (x, y) in a.iter_mut().zip(b.iter_mut()) {
            bfly1(kind, x, y, l);
        }
    }

    fn mul_assign(self, acc: &mut [u64], x: &[u64]) {
        assert_eq!(acc.len(), x.len(), "pointwise product: lengths differ");
        for (a, &b) in acc.iter_mut().zip(x) {
            *a = gf64::mul(*a, b);
        }
    }

    fn mul_acc(self, acc: &mut [u64], x: &[u64], y: &[u64]) {
        assert!(acc.len() == x.len() && x.len() == y.len());
        for ((a, &b), &c) in acc.iter_mut().zip(x).zip(y) {
            *a ^= gf64::mul(b, c);
        }
    }

    fn xor_into(self, dst: &mut [u64], src: &[u64]) {
        assert_eq!(dst.len(), src.len(), "xor: lengths differ");
        for (d, &s) in dst.iter_mut().zip(src) {
            *d ^= s;
        }
    }
}

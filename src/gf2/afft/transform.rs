//! The LCH transforms in the novel polynomial basis, their inverses and
//! transposes, with truncation.
//!
//! # The transform
//!
//! S.-J. Lin, W.-H. Chung and Y. S. Han, "Novel polynomial basis and its
//! application to Reed-Solomon erasure codes", FOCS 2014; S.-J. Lin,
//! T. Y. Al-Naffouri, Y. S. Han and W.-H. Chung, "Novel polynomial basis with
//! fast Fourier transform and its application to Reed-Solomon erasure codes",
//! IEEE Trans. Inf. Theory 62(11), 2016. With the Cantor basis of
//! [`super::gf64`], the normalised subspace polynomials are `s_i` themselves
//! (`s_i(beta_i) = 1`) and the novel basis is
//!
//! ```text
//! X_j(y) = product over the set bits i of j of s_i(y),   deg X_j = j.
//! ```
//!
//! The transform of `f = sum_(j < 2^k) f_j X_j` evaluates it on
//! `V_k = { omega_u }`, output `u` in natural order. Splitting
//! `f = f0 + s_(k-1) f1` (low and high halves of the coefficients), on the
//! coset `c + V_(k-1)` `s_(k-1)` is the constant `l = s_(k-1)(c)`, and on
//! `c + beta_(k-1) + V_(k-1)` it is `l + 1`, so one butterfly
//! `f0 ^= l f1; f1 ^= f0` leaves the two half-size problems. A block of
//! `2^(L+1)` outputs at global position `pos` (level L) has
//! `c = omega_pos` and twiddle `l = s_L(omega_pos) = omega_(pos >> L)`
//! (`s_L(beta_i) = beta_(i-L)`), so every twiddle is a point of the span
//! ([`super::kernel::twiddle`]).
//!
//! The forward transform runs the levels top-down; the inverse undoes the
//! butterflies bottom-up; the transposes run the transposed butterflies in
//! the opposite order of their originals ([`super::kernel`] lists the four).
//!
//! # Truncation
//!
//! If only the first `2^L` coefficients can be nonzero, every butterfly of
//! the levels `>= L` has a zero upper half and is a copy, so the forward
//! transform copies the first block to all `2^(k-L)` blocks and runs levels
//! `L-1 .. 0` on each ([`fft`]). Transposed, those copies become sums: when
//! only the first `2^L` outputs of the transposed transform are wanted,
//! levels `0 .. L-1` run on each block and the blocks are summed
//! ([`fft_t`]).

use super::kernel::{twiddle, Bfly, Kern};
use rayon::prelude::*;

/// Blocks up to this many elements go to [`Kern::block`] whole (they sit in
/// the core's cache).
pub const BLOCK: usize = 1 << 11;
/// Blocks from this many elements on are split between threads.
const PARALLEL: usize = 1 << 15;

pub(crate) fn top_down<K: Kern>(k: K, kind: Bfly, f: &mut [u64], pos: usize) {
    let len = f.len();
    if len <= BLOCK {
        k.block(kind, f, pos);
        return;
    }
    let h = len / 2;
    let l = twiddle(pos, h.trailing_zeros());
    let (a, b) = f.split_at_mut(h);
    bfly_par(k, kind, a, b, l);
    if len >= PARALLEL {
        rayon::join(
            || top_down(k, kind, a, pos),
            || top_down(k, kind, b, pos + h),
        );
    } else {
        top_down(k, kind, a, pos);
        top_down(k, kind, b, pos + h);
    }
}

pub(crate) fn bottom_up<K: Kern>(k: K, kind: Bfly, f: &mut [u64], pos: usize) {
    let len = f.len();
    if len <= BLOCK {
        k.block(kind, f, pos);
        return;
    }
    let h = len / 2;
    let l = twiddle(pos, h.trailing_zeros());
    let (a, b) = f.split_at_mut(h);
    if len >= PARALLEL {
        rayon::join(
            || bottom_up(k, kind, a, pos),
            || bottom_up(k, kind, b, pos + h),
        );
    } else {
        bottom_up(k, kind, a, pos);
        bottom_up(k, kind, b, pos + h);
    }
    bfly_par(k, kind, a, b, l);
}

/// One level's butterflies on a large block, split between threads.
fn bfly_par<K: Kern>(k: K, kind: Bfly, a: &mut [u64], b: &mut [u64], l: u64) {
    if a.len() >= PARALLEL {
        let chunk = PARALLEL / 2;
        a.par_chunks_mut(chunk)
            .zip(b.par_chunks_mut(chunk))
            .for_each(|(x, y)| k.bfly(kind, x, y, l));
    } else {
        k.bfly(kind, a, b, l);
    }
}

/// The transform of `f` (novel-basis coefficients, only the first `support`
/// of which may be nonzero; the rest is ignored) into its values on `V_k`,
/// `k = log2 f.len()`.
///
/// # Panics
/// If `f.len()` is not a power of two.
pub fn fft<K: Kern>(k: K, f: &mut [u64], support: usize) {
    assert!(f.len().is_power_of_two(), "transform length must be 2^k");
    let sub = support.max(1).next_power_of_two().min(f.len());
    f[support.min(sub)..sub].fill(0);
    let (first, rest) = f.split_at_mut(sub);
    rest.par_chunks_mut(sub.max(PARALLEL)).for_each(|c| {
        c.chunks_exact_mut(sub)
            .for_each(|d| d.copy_from_slice(first))
    });
    f.par_chunks_mut(sub)
        .enumerate()
        .for_each(|(j, blk)| top_down(k, Bfly::Fft, blk, j * sub));
}

/// The inverse of [`fft`] (full length).
pub fn ifft<K: Kern>(k: K, f: &mut [u64]) {
    assert!(f.len().is_power_of_two(), "transform length must be 2^k");
    bottom_up(k, Bfly::Ifft, f, 0);
}

/// The transpose of the inverse transform (full length).
pub fn ifft_t<K: Kern>(k: K, f: &mut [u64]) {
    assert!(f.len().is_power_of_two(), "transform length must be 2^k");
    top_down(k, Bfly::IfftT, f, 0);
}

/// The first `out_len` coordinates of the transpose of [`fft`] applied to
/// `f`; they are left in `f[..out_len.next_power_of_two()]` (the rest of `f`
/// is scratch afterwards). Returns that length.
pub fn fft_t<K: Kern>(k: K, f: &mut [u64], out_len: usize) -> usize {
    assert!(f.len().is_power_of_two(), "transform length must be 2^k");
    let sub = out_len.max(1).next_power_of_two().min(f.len());
    f.par_chunks_mut(sub)
        .enumerate()
        .for_each(|(j, blk)| bottom_up(k, Bfly::FftT, blk, j * sub));
    let (first, rest) = f.split_at_mut(sub);
    for c in rest.chunks_exact(sub) {
        xor_par(k, first, c);
    }
    sub
}

/// `dst ^= src`, split between threads when large.
pub fn xor_par<K: Kern>(k: K, dst: &mut [u64], src: &[u64]) {
    if dst.len() >= PARALLEL {
        dst.par_chunks_mut(PARALLEL)
            .zip(src.par_chunks(PARALLEL))
            .for_each(|(d, s)| k.xor_into(d, s));
    } else {
        k.xor_into(dst, src);
    }
}

#[cfg(test)]
mod tests {
    use super::super::gf64::{self, Points};
    use super::super::kernel::Portable;
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

    /// `s_i(y)` by its definition: the product of `(y - a)` over `V_i`,
    /// evaluated directly.
    fn subspace_poly_at(i: usize, y: u64) -> u64 {
        let p = Points::get();
        (0..1usize << i).fold(1, |acc, u| gf64::mul(acc, y ^ p.omega(u)))
    }

    /// `f(omega_u)` straight from the definition of the novel basis.
    fn eval_novel(f: &[u64], u: usize) -> u64 {
        let y = Points::get().omega(u);
        let k = f.len().trailing_zeros() as usize;
        let s: Vec<u64> = (0..k).map(|i| subspace_poly_at(i, y)).collect();
        f.iter().enumerate().fold(0, |acc, (j, &c)| {
            let xj = (0..k)
                .filter(|i| (j >> i) & 1 == 1)
                .fold(1, |a, i| gf64::mul(a, s[i]));
            acc ^ gf64::mul(c, xj)
        })
    }

    #[test]
    fn subspace_polynomials_are_normalised_and_linear() {
        let p = Points::get();
        for i in 0..7 {
            assert_eq!(subspace_poly_at(i, p.beta[i]), 1, "s_{i}(beta_{i})");
            for j in i..12 {
                assert_eq!(subspace_poly_at(i, p.beta[j]), p.beta[j - i]);
            }
        }
    }

    #[test]
    fn forward_transform_evaluates_the_novel_basis_polynomial() {
        for k in 0..=7 {
            let n = 1usize << k;
            for support in [1, n / 2 + 1, n].into_iter().filter(|&s| s >= 1 && s <= n) {
                let mut f = rand_vec(k as u64 * 7 + support as u64, n);
                f[support..].fill(0);
                let want: Vec<u64> = (0..n).map(|u| eval_novel(&f, u)).collect();
                let mut got = f.clone();
                got[support..].fill(0xdead);
                fft(Portable, &mut got, support);
                assert_eq!(got, want, "k = {k}, support = {support}");
                ifft(Portable, &mut got);
                assert_eq!(&got[..], &f[..], "inverse, k = {k}");
            }
        }
    }

    /// Inner product over GF(2^64).
    fn dot(a: &[u64], b: &[u64]) -> u64 {
        a.iter().zip(b).fold(0, |s, (&x, &y)| s ^ gf64::mul(x, y))
    }

    #[test]
    fn transposes_satisfy_the_adjoint_identity() {
        // <T a, b> = <a, T^T b> for random a, b (the definition of the
        // transpose).
        for k in [1usize, 2, 5, 12, 13] {
            let n = 1 << k;
            for trial in 0..3u64 {
                let a = rand_vec(trial * 31 + k as u64, n);
                let b = rand_vec(trial * 17 + 1000 + k as u64, n);
                let mut ta = a.clone();
                fft(Portable, &mut ta, n);
                let mut tb = b.clone();
                fft_t(Portable, &mut tb, n);
                assert_eq!(dot(&ta, &b), dot(&a, &tb), "fft, k = {k}");
                let mut ia = a.clone();
                ifft(Portable, &mut ia);
                let mut ib = b.clone();
                ifft_t(Portable, &mut ib);
                assert_eq!(dot(&ia, &b), dot(&a, &ib), "ifft, k = {k}");
                // Truncated: only the first `o` outputs of fft_t, against
                // fft of inputs supported there.
                let o = (n / 4).max(1) + 1;
                let mut a2 = a.clone();
                a2[o.min(n)..].fill(0);
                let mut ta2 = a2.clone();
                fft(Portable, &mut ta2, o.min(n));
                let mut tb2 = b.clone();
                let sub = fft_t(Portable, &mut tb2, o.min(n));
                assert_eq!(
                    dot(&ta2, &b),
                    dot(&a2[..sub], &tb2[..sub]),
                    "fft_t trunc k = {k}"
                );
            }
        }
    }
}

//! Basis conversion between the monomial basis `y^j` and the novel basis
//! `X_j` of [`super::transform`], and the transposes of both.
//!
//! # The algorithm
//!
//! With the Cantor basis, `s_(2^t)(y) = y^(2^(2^t)) + y` and
//! `s_(2^t + i) = s_i o s_(2^t)`, so for `tau = 2^(2^t)` and
//! `l(y) = y^tau + y`, an index `j = j_hi tau + j_lo` (`j_lo < tau`) has
//! `X_j(y) = X_(j_lo)(y) X_(j_hi)(l(y))`. A polynomial of degree `< 2^k`
//! (take `2^t < k <= 2^(t+1)`) is converted in three steps:
//!
//! 1. the Taylor expansion at `l`: `f = sum_i h_i(y) l^i` with
//!    `deg h_i < tau` (S. Gao and T. Mateer, "Additive fast Fourier
//!    transforms over finite fields", IEEE Trans. Inf. Theory 56(12), 2010,
//!    section on the Taylor expansion). With `n = 2m`, `m = tau 2^r`,
//!    `l^(2^r) = y^m + y^(2^r)` (characteristic 2), so `f = R + Q l^(2^r)` is
//!    one pass `f[i - m + 2^r] ^= f[i]` for `i = n-1 .. m` (downwards, so
//!    that the cascade into `[m, n)` is taken along), then both halves
//!    recursively; the `h_i` end up as consecutive rows of `tau`;
//! 2. each row `h_i` converted to the novel basis in `y` (size `tau`);
//! 3. for each `j_lo`, the column `sum_i a_(i, j_lo) l^i` converted to the
//!    novel basis in `l` (size `2^k / tau`); done on whole rows at once, so
//!    it is the same conversion with rows as coefficients.
//!
//! Sizes 1 and 2 are the identity (`X_0 = 1`, `X_1 = y`). Every step is a
//! sequence of XORs `f[a] ^= f[b]`, each its own inverse and with the
//! transpose `f[b] ^= f[a]`. So the inverse runs the same sequence backwards,
//! the transpose runs the transposed operations backwards, and the
//! transpose of the inverse runs the transposed operations forwards
//! ([`Conv`]). The cost is about `(n/2) log2(n) log2(log2(n))` element XORs.

use super::kernel::Kern;
use super::transform::xor_par;

/// Which of the four linear maps.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Conv {
    /// Monomial to novel basis (`C`).
    ToNovel,
    /// Novel to monomial basis (`D = C^-1`).
    ToMono,
    /// The transpose `C^T`.
    ToNovelT,
    /// The transpose `D^T`.
    ToMonoT,
}

impl Conv {
    /// Whether the XORs run in their original order (else backwards).
    fn forward(self) -> bool {
        matches!(self, Conv::ToNovel | Conv::ToMonoT)
    }
    /// Whether every XOR is transposed.
    fn transposed(self) -> bool {
        matches!(self, Conv::ToNovelT | Conv::ToMonoT)
    }
}

/// Converts `f` in place; `f.len() / unit` coefficients (a power of two),
/// each a run of `unit` elements.
///
/// # Panics
/// If the number of coefficients is not a power of two.
pub fn convert<K: Kern>(k: K, f: &mut [u64], unit: usize, mode: Conv) {
    assert!(unit >= 1 && f.len().is_multiple_of(unit));
    let n = f.len() / unit;
    assert!(n.is_power_of_two(), "conversion length must be 2^k");
    if n <= 2 {
        return;
    }
    let kk = n.trailing_zeros();
    let t = 31 - (kk - 1).leading_zeros(); // largest t with 2^t < kk
    let tau = 1usize << (1u32 << t);
    let rows = n / tau;
    if mode.forward() {
        taylor(k, f, unit, tau, mode);
    }
    if unit == 1 && rows >= 8 && n <= TRANSPOSE_MAX {
        // The rows are `rows` conversions of size tau on single elements:
        // transposed, they are one conversion whose coefficients are runs
        // of `rows` elements, which vectorises.
        SCRATCH.with(|cell| {
            let mut buf = cell.take();
            buf.resize(n, 0);
            transpose(f, &mut buf[..n], rows, tau);
            convert(k, &mut buf[..n], rows, mode);
            transpose(&buf[..n], f, tau, rows);
            cell.set(buf);
        });
    } else {
        for row in f.chunks_exact_mut(tau * unit) {
            convert(k, row, unit, mode);
        }
    }
    convert(k, f, unit * tau, mode);
    if !mode.forward() {
        taylor(k, f, unit, tau, mode);
    }
}

/// Largest conversion whose rows are done by transposing (it sits in the
/// core's cache).
const TRANSPOSE_MAX: usize = 1 << 16;

thread_local! {
    static SCRATCH: std::cell::Cell<Vec<u64>> = const { std::cell::Cell::new(Vec::new()) };
}

/// `dst[c * rows + r] = src[r * cols + c]` (a `rows x cols` matrix, row
/// major, into its transpose), in 8 x 8 tiles.
fn transpose(src: &[u64], dst: &mut [u64], rows: usize, cols: usize) {
    debug_assert!(src.len() == rows * cols && dst.len() == rows * cols);
    const T: usize = 8;
    if rows < T || cols < T {
        for r in 0..rows {
            for c in 0..cols {
                dst[c * rows + r] = src[r * cols + c];
            }
        }
        return;
    }
    for r0 in (0..rows).step_by(T) {
        for c0 in (0..cols).step_by(T) {
            for r in r0..r0 + T {
                let s = &src[r * cols + c0..r * cols + c0 + T];
                for (i, &v) in s.iter().enumerate() {
                    dst[(c0 + i) * rows + r] = v;
                }
            }
        }
    }
}

/// The recursive Taylor expansion of size `f.len()` at `y^tau + y` (unit
/// 1), the slow twin of [`super::passes::taylor_pass`].
#[cfg(test)]
pub(crate) fn taylor_for_tests<K: Kern>(k: K, f: &mut [u64], tau: usize, mode: Conv) {
    taylor(k, f, 1, tau, mode)
}

/// The Taylor expansion at `y^tau + y` (or its inverse / transposes).
fn taylor<K: Kern>(k: K, f: &mut [u64], unit: usize, tau: usize, mode: Conv) {
    let n = f.len() / unit;
    if n <= tau {
        return;
    }
    let m = n / 2;
    if mode.forward() {
        step(k, f, unit, m, m - m / tau, mode);
    }
    let (lo, hi) = f.split_at_mut(m * unit);
    if lo.len() >= 1 << 16 {
        rayon::join(
            || taylor(k, lo, unit, tau, mode),
            || taylor(k, hi, unit, tau, mode),
        );
    } else {
        taylor(k, lo, unit, tau, mode);
        taylor(k, hi, unit, tau, mode);
    }
    if !mode.forward() {
        step(k, f, unit, m, m - m / tau, mode);
    }
}

/// The operations `f[i - d] ^= f[i]` (transposed: `f[i] ^= f[i - d]`) for
/// `i` in `[m, 2m)`, downwards in forward order and upwards backwards, in
/// chunks of at most `d` indices (no operation in a chunk reads what another
/// one in it writes).
fn step<K: Kern>(k: K, f: &mut [u64], unit: usize, m: usize, d: usize, mode: Conv) {
    let n = 2 * m;
    let mut one = |c0: usize, c1: usize| {
        // Indices [c0, c1) and [c0 - d, c1 - d), disjoint since c1 - c0 <= d.
        let (low, high) = f.split_at_mut(c0 * unit);
        let low = &mut low[(c0 - d) * unit..(c1 - d) * unit];
        let high = &mut high[..(c1 - c0) * unit];
        if mode.transposed() {
            xor_par(k, high, low);
        } else {
            xor_par(k, low, high);
        }
    };
    if mode.forward() {
        let mut hi = n;
        while hi > m {
            let lo = hi.saturating_sub(d).max(m);
            one(lo, hi);
            hi = lo;
        }
    } else {
        let mut lo = m;
        while lo < n {
            let hi = (lo + d).min(n);
            one(lo, hi);
            lo = hi;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::super::gf64;
    use super::super::kernel::Portable;
    use super::*;

    /// Binary polynomials as coefficient vectors (bit per entry).
    fn poly_mul(a: &[u8], b: &[u8]) -> Vec<u8> {
        let mut c = vec![0u8; a.len() + b.len() - 1];
        for (i, &x) in a.iter().enumerate() {
            for (j, &y) in b.iter().enumerate() {
                c[i + j] ^= x & y;
            }
        }
        c
    }

    /// `X_j` in the monomial basis by its definition: the product of the
    /// `s_i`, with `s_i = s_1 o s_(i-1)` expanded as `s_(i-1)^2 + s_(i-1)`.
    fn novel_basis_monomials(k: usize) -> Vec<Vec<u8>> {
        let mut s: Vec<Vec<u8>> = vec![vec![0, 1]]; // s_0 = y
        for i in 1..k {
            let prev = &s[i - 1];
            let mut sq = poly_mul(prev, prev);
            for (c, &p) in sq.iter_mut().zip(prev) {
                *c ^= p;
            }
            s.push(sq);
        }
        (0..1usize << k)
            .map(|j| {
                let mut x = vec![1u8];
                for (i, si) in s.iter().enumerate() {
                    if (j >> i) & 1 == 1 {
                        x = poly_mul(&x, si);
                    }
                }
                x.resize(1 << k, 0);
                x
            })
            .collect()
    }

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
    fn novel_to_monomial_matches_the_definition() {
        for k in 0..=8 {
            let basis = novel_basis_monomials(k);
            let n = 1usize << k;
            // D applied to the unit vector e_j gives the monomial
            // coefficients of X_j (as elements 0/1).
            for (j, xj) in basis.iter().enumerate() {
                let mut f = vec![0u64; n];
                f[j] = 1;
                convert(Portable, &mut f, 1, Conv::ToMono);
                let want: Vec<u64> = xj.iter().map(|&b| b as u64).collect();
                assert_eq!(f, want, "k = {k}, X_{j}");
            }
        }
    }

    fn dot(a: &[u64], b: &[u64]) -> u64 {
        a.iter().zip(b).fold(0, |s, (&x, &y)| s ^ gf64::mul(x, y))
    }

    #[test]
    fn inverse_and_transposes() {
        for k in [0usize, 1, 2, 3, 5, 9, 13, 17] {
            let n = 1 << k;
            let a = rand_vec(k as u64 + 5, n);
            let b = rand_vec(k as u64 + 99, n);
            let mut c = a.clone();
            convert(Portable, &mut c, 1, Conv::ToNovel);
            let mut back = c.clone();
            convert(Portable, &mut back, 1, Conv::ToMono);
            assert_eq!(back, a, "D(C(a)) = a, k = {k}");
            let mut ct = b.clone();
            convert(Portable, &mut ct, 1, Conv::ToNovelT);
            assert_eq!(dot(&c, &b), dot(&a, &ct), "C^T, k = {k}");
            let mut d = a.clone();
            convert(Portable, &mut d, 1, Conv::ToMono);
            let mut dt = b.clone();
            convert(Portable, &mut dt, 1, Conv::ToMonoT);
            assert_eq!(dot(&d, &b), dot(&a, &dt), "D^T, k = {k}");
        }
    }
}

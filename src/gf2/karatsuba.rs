//! Karatsuba products of word-packed GF(2) polynomials.
//!
//! Two operations:
//!
//! * [`mul`]: the full product `c = a * b`.
//! * the *middle product* (transposed Karatsuba, as in Hanrot, Quercia and
//!   Zimmermann, "The middle product algorithm I", AAECC 14, 2004 -- the
//!   three-product splitting below is derived on this page):
//!   for `x` of N words and `a` of 2N - 1 words,
//!
//!   ```text
//!   out[r] = XOR_{j < N} clmul(a[r + N - 1 - j], x[j])      (128-bit, r < N)
//!   ```
//!
//!   i.e. the N "diagonals" of the word-level product that a Toeplitz
//!   matrix-vector product needs, for the price of one N x N product.
//!
//! Splitting N = 2h, `x = (x0, x1)`, `a = (a0 | a1 | a2)` with `a0 = a[0..2h-1]`,
//! `a1 = a[h..3h-1]`, `a2 = a[2h..4h-1]` (overlapping windows), the two output
//! halves are `out0 = MP(a1, x0) + MP(a0, x1)` and `out1 = MP(a2, x0) +
//! MP(a1, x1)`. Over GF(2) these equal
//!
//! ```text
//! P = MP(a1, x0 + x1),   out0 = P + MP(a0 + a1, x1),   out1 = P + MP(a1 + a2, x0)
//! ```
//!
//! (expand and the MP(a1, x1), MP(a1, x0) terms cancel in pairs): three
//! half-size products instead of four. The recursion stops at a base size where
//! the backend's register-accumulating kernel takes over.

use super::clmul::{self, Backend};

/// Word-level middle product kernels with Karatsuba recursion.
#[derive(Clone, Copy, Debug)]
pub struct MiddleKernel {
    backend: Backend,
    base: usize,
}

impl MiddleKernel {
    /// A kernel for `backend` with base-case size `base` words (the
    /// recursion runs on sizes `base * 2^k`); `base` must satisfy
    /// [`supports_base`].
    ///
    /// # Panics
    /// If the backend is not supported here or `base` does not suit it.
    pub fn new(backend: Backend, base: usize) -> Self {
        assert!(
            backend.is_supported(),
            "backend {} not supported on this CPU",
            backend.name()
        );
        assert!(
            supports_base(backend, base),
            "{} base case cannot take {base} words",
            backend.name()
        );
        MiddleKernel { backend, base }
    }

    /// The backend.
    pub fn backend(&self) -> Backend {
        self.backend
    }

    /// Base-case size in words.
    pub fn base(&self) -> usize {
        self.base
    }

    /// Scratch words needed by [`mp`](Self::mp) for size `n`.
    pub fn scratch_len(&self, n: usize) -> usize {
        let mut total = 0;
        let mut size = n;
        while size > self.base && size.is_multiple_of(2) {
            let h = size / 2;
            total += h + (2 * h - 1) + 2 * h;
            size = h;
        }
        total
    }

    /// `out ^= MP(a, x)` for `x` of N words (N = base * 2^k), `a` of 2N - 1
    /// words, `out` of 2N words (row r in `out[2r]` (low), `out[2r+1]` (high)).
    ///
    /// # Panics
    /// On inconsistent lengths or too little scratch.
    pub fn mp(&self, a: &[u64], x: &[u64], out: &mut [u64], scratch: &mut [u64]) {
        let n = x.len();
        assert!(
            a.len() == 2 * n - 1 && out.len() == 2 * n,
            "middle product: x has {n} words, a {} (want {}), out {} (want {})",
            a.len(),
            2 * n - 1,
            out.len(),
            2 * n
        );
        assert!(
            scratch.len() >= self.scratch_len(n),
            "middle product: scratch too small"
        );
        self.mp_rec(a, x, out, scratch);
    }

    fn mp_rec(&self, a: &[u64], x: &[u64], out: &mut [u64], scratch: &mut [u64]) {
        let n = x.len();
        if n <= self.base || n % 2 == 1 {
            self.base_case(a, x, out);
            return;
        }
        let h = n / 2;
        let (tx, rest) = scratch.split_at_mut(h);
        let (ta, rest) = rest.split_at_mut(2 * h - 1);
        let (t, rest) = rest.split_at_mut(2 * h);
        let (x0, x1) = x.split_at(h);
        let a0 = &a[..2 * h - 1];
        let a1 = &a[h..3 * h - 1];
        let a2 = &a[2 * h..4 * h - 1];
        let (out0, out1) = out.split_at_mut(2 * h);

        // P = MP(a1, x0 + x1), added to both halves.
        self.xor3(tx, x0, x1);
        t.fill(0);
        self.mp_rec(a1, tx, t, rest);
        self.xor_into(out0, t);
        self.xor_into(out1, t);
        // out0 += MP(a0 + a1, x1)
        self.xor3(ta, a0, a1);
        self.mp_rec(ta, x1, out0, rest);
        // out1 += MP(a1 + a2, x0)
        self.xor3(ta, a1, a2);
        self.mp_rec(ta, x0, out1, rest);
    }

    #[inline]
    fn base_case(&self, a: &[u64], x: &[u64], out: &mut [u64]) {
        match self.backend {
            Backend::Portable => clmul::portable::mp_base(a, x, out),
            #[cfg(target_arch = "x86_64")]
            Backend::Pclmul => {
                // SAFETY: MiddleKernel::new checked that the backend is supported.
                unsafe { clmul::pclmul::mp_base(a, x, out) }
            }
            #[cfg(target_arch = "x86_64")]
            Backend::Vpclmul => {
                if clmul::vpclmul::supports_base(x.len()) {
                    // SAFETY: MiddleKernel::new checked that the backend is supported.
                    unsafe { clmul::vpclmul::mp_base(a, x, out) }
                } else {
                    // SAFETY: Vpclmul support implies Pclmul support (Backend::is_supported).
                    unsafe { clmul::pclmul::mp_base(a, x, out) }
                }
            }
            #[cfg(target_arch = "x86_64")]
            Backend::Vpclmul256 => {
                if clmul::vpclmul256::supports_base(x.len()) {
                    // SAFETY: MiddleKernel::new checked that the backend is supported.
                    unsafe { clmul::vpclmul256::mp_base(a, x, out) }
                } else {
                    // SAFETY: Vpclmul256 support implies Pclmul support (Backend::is_supported).
                    unsafe { clmul::pclmul::mp_base(a, x, out) }
                }
            }
            #[cfg(not(target_arch = "x86_64"))]
            _ => unreachable!(),
        }
    }

    #[inline]
    fn xor3(&self, dst: &mut [u64], a: &[u64], b: &[u64]) {
        #[cfg(target_arch = "x86_64")]
        if self.backend == Backend::Vpclmul {
            // SAFETY: Vpclmul support includes avx512f (Backend::is_supported).
            unsafe { clmul::vpclmul::xor3(dst, a, b) };
            return;
        }
        #[cfg(target_arch = "x86_64")]
        if self.backend == Backend::Vpclmul256 {
            // SAFETY: Vpclmul256 support includes avx2 (Backend::is_supported).
            unsafe { clmul::vpclmul256::xor3(dst, a, b) };
            return;
        }
        xor3(dst, a, b)
    }

    #[inline]
    fn xor_into(&self, dst: &mut [u64], src: &[u64]) {
        #[cfg(target_arch = "x86_64")]
        if self.backend == Backend::Vpclmul {
            // SAFETY: Vpclmul support includes avx512f (Backend::is_supported).
            unsafe { clmul::vpclmul::xor_into(dst, src) };
            return;
        }
        #[cfg(target_arch = "x86_64")]
        if self.backend == Backend::Vpclmul256 {
            // SAFETY: Vpclmul256 support includes avx2 (Backend::is_supported).
            unsafe { clmul::vpclmul256::xor_into(dst, src) };
            return;
        }
        for (d, s) in dst.iter_mut().zip(src) {
            *d ^= s;
        }
    }
}

/// Whether [`MiddleKernel`] can use `base` words as its base-case size with
/// `backend`: the vector kernels take row counts in groups of their register
/// width (8 words for AVX-512, 4 for AVX2), up to 64 words.
pub fn supports_base(backend: Backend, base: usize) -> bool {
    match backend {
        Backend::Portable | Backend::Pclmul => base >= 1,
        #[cfg(target_arch = "x86_64")]
        Backend::Vpclmul => clmul::vpclmul::supports_base(base),
        #[cfg(target_arch = "x86_64")]
        Backend::Vpclmul256 => clmul::vpclmul256::supports_base(base),
        #[cfg(not(target_arch = "x86_64"))]
        _ => false,
    }
}

#[inline]
fn xor3(dst: &mut [u64], a: &[u64], b: &[u64]) {
    for ((d, x), y) in dst.iter_mut().zip(a).zip(b) {
        *d = x ^ y;
    }
}

/// Below this many words (of the shorter operand) [`mul`] multiplies
/// directly.
const MUL_BASE: usize = 16;

/// Full carry-less product `c = a * b` of word-packed polynomials;
/// `c.len()` must be `a.len() + b.len()` (Karatsuba above a small size).
///
/// # Panics
/// If `c` has the wrong length or the backend is not supported.
pub fn mul(backend: Backend, a: &[u64], b: &[u64], c: &mut [u64]) {
    assert_eq!(
        c.len(),
        a.len() + b.len(),
        "product buffer: want a.len() + b.len() words"
    );
    assert!(
        backend.is_supported(),
        "backend {} not supported on this CPU",
        backend.name()
    );
    c.fill(0);
    if a.is_empty() || b.is_empty() {
        return;
    }
    mul_acc(backend, a, b, c);
}

/// `c[..a.len() + b.len()] ^= a * b`.
fn mul_acc(backend: Backend, a: &[u64], b: &[u64], c: &mut [u64]) {
    let (a, b) = if a.len() >= b.len() { (a, b) } else { (b, a) };
    let (na, nb) = (a.len(), b.len());
    if nb == 0 {
        return;
    }
    if nb < MUL_BASE {
        for (i, &ai) in a.iter().enumerate() {
            for (j, &bj) in b.iter().enumerate() {
                let (lo, hi) = backend.clmul64(ai, bj);
                c[i + j] ^= lo;
                c[i + j + 1] ^= hi;
            }
        }
        return;
    }
    if na > nb {
        // Unbalanced: cut `a` into slices of b's length.
        let mut off = 0;
        while off < na {
            let end = (off + nb).min(na);
            mul_acc(backend, &a[off..end], b, &mut c[off..end + nb]);
            off = end;
        }
        return;
    }
    // Balanced Karatsuba: a = a0 + z^h a1, b = b0 + z^h b1 (h words),
    // a*b = a0 b0 + z^h ((a0 + a1)(b0 + b1) + a0 b0 + a1 b1) + z^2h a1 b1.
    let h = na.div_ceil(2);
    let (a0, a1) = a.split_at(h);
    let (b0, b1) = b.split_at(h);
    let mut p0 = vec![0u64; 2 * h];
    let mut p2 = vec![0u64; a1.len() + b1.len()];
    let mut sa = a0.to_vec();
    let mut sb = b0.to_vec();
    for (s, v) in sa.iter_mut().zip(a1) {
        *s ^= v;
    }
    for (s, v) in sb.iter_mut().zip(b1) {
        *s ^= v;
    }
    let mut p1 = vec![0u64; 2 * h];
    mul_acc(backend, a0, b0, &mut p0);
    mul_acc(backend, a1, b1, &mut p2);
    mul_acc(backend, &sa, &sb, &mut p1);
    for (i, v) in p0.iter().enumerate() {
        p1[i] ^= v;
        c[i] ^= v;
    }
    for (i, v) in p2.iter().enumerate() {
        p1[i] ^= v;
        c[2 * h + i] ^= v;
    }
    for (i, v) in p1.iter().enumerate() {
        if h + i < c.len() {
            c[h + i] ^= v;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gf2::reference;

    fn words(seed: u64, n: usize) -> Vec<u64> {
        let mut s = seed.wrapping_mul(0x9e37_79b9_7f4a_7c15) | 1;
        (0..n)
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect()
    }

    fn mp_naive(a: &[u64], x: &[u64]) -> Vec<u64> {
        let n = x.len();
        let mut out = vec![0u64; 2 * n];
        for r in 0..n {
            for j in 0..n {
                let p = reference::clmul_bitwise(a[r + n - 1 - j], x[j]);
                out[2 * r] ^= p as u64;
                out[2 * r + 1] ^= (p >> 64) as u64;
            }
        }
        out
    }

    #[test]
    fn middle_product_matches_definition_for_every_backend() {
        for be in Backend::all_supported() {
            for &(base, n) in &[
                (8, 8),
                (8, 16),
                (8, 64),
                (16, 128),
                (24, 96),
                (1, 1),
                (3, 12),
                (5, 5),
                (7, 56),
                (4, 4),
                (12, 48),
                (20, 80),
                (60, 60),
                (64, 128),
            ] {
                if !supports_base(be, base) {
                    continue;
                }
                let k = MiddleKernel::new(be, base);
                let a = words(n as u64, 2 * n - 1);
                let x = words(n as u64 + 99, n);
                let mut out = vec![0u64; 2 * n];
                let mut scratch = vec![0u64; k.scratch_len(n)];
                k.mp(&a, &x, &mut out, &mut scratch);
                assert_eq!(out, mp_naive(&a, &x), "{be:?} base {base} n {n}");
            }
        }
    }

    #[test]
    fn full_product_matches_bitwise_product() {
        for be in Backend::all_supported() {
            for &(na, nb) in &[
                (1, 1),
                (3, 5),
                (16, 16),
                (17, 40),
                (100, 33),
                (64, 64),
                (130, 129),
            ] {
                let a = words(na as u64, na);
                let b = words(nb as u64 + 7, nb);
                let mut c = vec![0u64; na + nb];
                mul(be, &a, &b, &mut c);
                assert_eq!(c, reference::mul_bitwise(&a, &b), "{be:?} {na}x{nb}");
            }
        }
    }
}

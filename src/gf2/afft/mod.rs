//! The Toeplitz window by an additive FFT over GF(2^64): a middle product
//! that costs about one product of the input's size, for whole-run blocks.
//!
//! # From bits to field elements (half-filled elements)
//!
//! Cut a bit string into 32-bit chunks, chunk j the polynomial `X_j(z)` of
//! degree < 32, so `X(z) = sum_j X_j(z) Z^j` with `Z = z^32`. Read each chunk
//! as an element of GF(2^64) = GF(2)[z]/P(z) ([`gf64`]) in the polynomial
//! basis: only the low half is filled. The product of two such elements has
//! degree at most 62 < 64, so it is never reduced: the field product *is* the
//! polynomial product. So for `S(z) X(z) = sum_i c_i(z) Z^i`, the 63-bit
//! coefficients `c_i = sum_j S_(i-j) X_j` are exactly what the product of
//! `S(Z)` and `X(Z)` as polynomials over GF(2^64) gives, and bit `32 i + b`
//! of the binary product is the XOR of bit b of `c_i` and bit `b + 32` of
//! `c_(i-1)` (overlap-add). The arithmetic over GF(2^64) is then free to use
//! any fast algorithm, as long as it computes the same bilinear map.
//!
//! (Chunking into half-filled elements follows M.-S. Chen, C.-M. Cheng,
//! P.-C. Kuo, W.-D. Li and B.-Y. Yang, "Faster multiplication for long binary
//! polynomials", arXiv:1708.09746, 2017, which multiplies long binary
//! polynomials by the additive FFT of [`transform`]; the derivation here is
//! our own.)
//!
//! # The window by transposition
//!
//! Toeplitz hashing needs only `m` bits of the product (`spec/conventions.md`):
//! with the seed shifted so that the window starts on a chunk, and padded with
//! zero chunks, this is a *middle product*
//!
//! ```text
//! out_r = sum_(j < nx) A_(r + nx - 1 - j) X_j ,   r < M,   A of nx + M - 1 chunks.
//! ```
//!
//! For fixed X, `A -> out` is the transpose of `v -> Xrev v` (the full
//! product with the reversed input, `Xrev_j = X_(nx-1-j)`), since
//! `(Xrev v)_t = sum_r X_(nx-1-t+r) v_r`. That full product is
//! `D IFFT( FFT(C Xrev) . FFT(C v) )` for any transform length
//! `2^k >= nx + M - 1` (`C`: monomial to novel basis, `D = C^-1`,
//! [`convert`]; `FFT`: [`transform`]). By the transposition principle
//! (A. Bostan, G. Lecerf and E. Schost, "Tellegen's principle into practice",
//! ISSAC 2003; G. Hanrot, M. Quercia and P. Zimmermann, "The middle product
//! algorithm I", AAECC 14, 2004) its transpose costs the same:
//!
//! ```text
//! out = first M of  C^T FFT^T( FFT(C Xrev) . IFFT^T(D^T A) )
//! ```
//!
//! The seed side `IFFT^T(D^T A)` depends only on the seed and is computed
//! once per seed ([`AfftWindow::prepare`]). Truncation saves the rest: `C Xrev`
//! has only `nx` nonzero coefficients, and only the first `M` outputs of
//! `FFT^T` are needed ([`transform::fft`], [`transform::fft_t`]; `C^T` is
//! lower triangular, so its first `M` outputs need only its first `M`
//! inputs).
//!
//! Every operation is GF(2^64)-linear, so the result is exact: there is no
//! rounding anywhere. The tests compare it with the bit-by-bit definition and
//! with the Karatsuba engine.

pub mod convert;
pub mod gf64;
pub mod kernel;
pub mod memory;
pub mod passes;
#[cfg(target_arch = "x86_64")]
mod pclmul;
pub mod transform;
#[cfg(target_arch = "x86_64")]
mod vpclmul256;
#[cfg(target_arch = "x86_64")]
mod x86;
#[cfg(all(test, target_arch = "x86_64"))]
mod x86_tests;

use crate::bits::words_for;
use crate::gf2::Backend;
use convert::Conv;
use kernel::{Bfly, Kern, Portable};
use passes::TAU;
use rayon::prelude::*;

/// Data bits per field element.
const CHUNK: usize = 32;
const LOW: u64 = 0xffff_ffff;

/// A plan for the window `[n-1, n+m-1)` of `S * X` by the additive FFT.
#[derive(Clone, Debug)]
pub struct AfftWindow {
    n: usize,
    m: usize,
    /// Left shift of the seed in bits, so that `out_0` is the chunk before
    /// the window's first.
    shift: usize,
    /// Input chunks.
    nx: usize,
    /// Output chunks M (one more than the window has).
    mo: usize,
    /// Transform length `2^k >= nx + M - 1`.
    len: usize,
    backend: Backend,
}

/// A seed prepared for one [`AfftWindow`]: `IFFT^T(D^T A)`.
#[derive(Clone, Default)]
pub struct AfftSeed {
    spec: Vec<u64>,
}

impl AfftSeed {
    /// Bytes held.
    pub fn heap_bytes(&self) -> usize {
        self.spec.capacity() * 8
    }
}

impl AfftWindow {
    /// Plans the window for an `n`-bit input and `m` output bits.
    ///
    /// # Panics
    /// If `n == 0`, `m == 0`, the backend does not run on this CPU, or the
    /// transform would need more than `2^32` points.
    pub fn new(n: usize, m: usize, backend: Backend) -> Self {
        assert!(n >= 1 && m >= 1, "toeplitz window needs n >= 1 and m >= 1");
        assert!(
            backend.is_supported(),
            "backend {} not supported",
            backend.name()
        );
        let p = (CHUNK - (n - 1) % CHUNK) % CHUNK;
        let k0 = (n - 1 + p) / CHUNK;
        let nx = n.div_ceil(CHUNK);
        let off = nx - k0;
        let mo = m.div_ceil(CHUNK) + 1;
        let len = (nx + mo - 1).next_power_of_two();
        assert!(len <= 1 << 32, "additive FFT: more than 2^32 points");
        AfftWindow {
            n,
            m,
            shift: CHUNK * off + p,
            nx,
            mo,
            len,
            backend,
        }
    }

    /// Whether one block of an n-bit input and m output bits fits in the
    /// transform (at most `2^32` points).
    pub fn fits(n: usize, m: usize) -> bool {
        let nx = n.div_ceil(CHUNK) as u64;
        let mo = m.div_ceil(CHUNK) as u64 + 1;
        nx + mo - 1 <= 1 << 32
    }

    /// Input bits n.
    pub fn input_bits(&self) -> usize {
        self.n
    }

    /// Output bits m.
    pub fn output_bits(&self) -> usize {
        self.m
    }

    /// Seed bits `n + m - 1`.
    pub fn seed_bits(&self) -> usize {
        self.n + self.m - 1
    }

    /// The backend.
    pub fn backend(&self) -> Backend {
        self.backend
    }

    /// Transform length (points).
    pub fn transform_len(&self) -> usize {
        self.len
    }

    /// Scratch words [`compute`](Self::compute) needs.
    pub fn scratch_len(&self) -> usize {
        self.len
    }

    /// Bytes of working memory one block needs beyond input and output: the
    /// prepared seed and the scratch.
    pub fn working_bytes(&self) -> usize {
        16 * self.len
    }

    /// Prepares a seed (`n + m - 1` bits in words; bits beyond are ignored).
    ///
    /// # Panics
    /// If `seed` has too few words.
    pub fn prepare(&self, seed: &[u64]) -> AfftSeed {
        let mut s = AfftSeed::default();
        self.prepare_into(seed, &mut s);
        s
    }

    /// As [`prepare`](Self::prepare), reusing `into`'s buffer.
    pub fn prepare_into(&self, seed: &[u64], into: &mut AfftSeed) {
        let bits = self.seed_bits();
        assert!(
            seed.len() >= words_for(bits),
            "seed: want {} words, got {}",
            words_for(bits),
            seed.len()
        );
        let f = &mut into.spec;
        memory::resize_zeroed(f, self.len);
        let na = self.nx + self.mo - 1;
        shifted_chunks(&seed[..words_for(bits)], bits, self.shift, &mut f[..na]);
        let k = AnyKern::new(self.backend);
        if self.len <= TAU {
            convert::convert(k, f, 1, Conv::ToMonoT);
            transform::ifft_t(k, f);
            return;
        }
        // D^T then IFFT^T, as a Taylor pass, a column pass (the conversion
        // on whole rows and the levels >= 16) and a row pass (module docs of
        // `passes`).
        let rows = self.len / TAU;
        let top = self.len.trailing_zeros() - 1;
        passes::taylor_pass(k, f, rows, Conv::ToMonoT);
        passes::col_pass(f, rows, rows, |buf, w| {
            convert::convert(k, buf, w, Conv::ToMonoT);
            passes::row_levels(k, Bfly::IfftT, buf, w, 0, top);
        });
        f.par_chunks_mut(TAU).enumerate().for_each(|(r, row)| {
            convert::convert(k, row, 1, Conv::ToMonoT);
            transform::top_down(k, Bfly::IfftT, row, r * TAU);
        });
    }

    /// Computes the window for input words `x` (n bits) into `out`
    /// (`ceil(m/64)` words; bits beyond m are cleared).
    ///
    /// # Panics
    /// On wrong lengths, too little scratch or a seed prepared for another
    /// plan.
    pub fn compute(&self, seed: &AfftSeed, x: &[u64], out: &mut [u64], scratch: &mut [u64]) {
        assert!(scratch.len() >= self.len, "scratch too small");
        assert_eq!(seed.spec.len(), self.len, "seed prepared for another plan");
        let f = &mut scratch[..self.len];
        let k = AnyKern::new(self.backend);
        if !self.input_by_passes() {
            self.transform_input(x, f);
            pointwise(k, f, &seed.spec, None);
            self.finish(f, out);
            return;
        }
        // One row pass between the input's column pass and the output's:
        // the input's levels < 16, the product with the seed, the output's
        // levels < 16.
        self.input_cols(k, x, f);
        f.par_chunks_mut(TAU)
            .zip(seed.spec.par_chunks(TAU))
            .enumerate()
            .for_each(|(r, (row, s))| {
                self.input_row(k, row, r);
                k.mul_assign(row, s);
                self.output_row(k, row, r);
            });
        self.output_after_rows(k, f, out);
    }

    /// Whether the input side runs as passes (its support fills whole rows
    /// of a transform longer than one row).
    fn input_by_passes(&self) -> bool {
        self.len > TAU && self.nx.next_power_of_two() >= TAU
    }

    /// The input's transform `FFT(C Xrev)` into `f` (the transform length).
    /// Linear in the input, so the transforms of pieces of one input can be
    /// combined (see [`accumulate`](Self::accumulate)).
    ///
    /// # Panics
    /// On wrong lengths.
    pub fn transform_input(&self, x: &[u64], f: &mut [u64]) {
        assert_eq!(x.len(), words_for(self.n), "input words");
        assert_eq!(f.len(), self.len, "transform length");
        let k = AnyKern::new(self.backend);
        if self.input_by_passes() {
            self.input_cols(k, x, f);
            f.par_chunks_mut(TAU)
                .enumerate()
                .for_each(|(r, row)| self.input_row(k, row, r));
            return;
        }
        let sup = self.nx.next_power_of_two();
        reversed_chunks(x, self.nx, &mut f[..sup]);
        convert::convert(k, &mut f[..sup], 1, Conv::ToNovel);
        transform::fft(k, f, sup);
    }

    /// The input side up to its row pass: encoding, the Taylor pass and the
    /// column pass (conversion on whole rows, copies to every block of the
    /// transform, levels >= 16 in each).
    fn input_cols(&self, k: AnyKern, x: &[u64], f: &mut [u64]) {
        let sup = self.nx.next_power_of_two();
        reversed_chunks(x, self.nx, &mut f[..sup]);
        let (rc, rows) = (sup / TAU, self.len / TAU);
        if rc >= 2 {
            passes::taylor_pass(k, &mut f[..sup], rc, Conv::ToNovel);
        }
        let top = sup.trailing_zeros();
        passes::col_pass(f, rc, rows, |buf, w| {
            convert::convert(k, buf, w, Conv::ToNovel);
            buf.resize(rows * w, 0);
            let (first, rest) = buf.split_at_mut(rc * w);
            for c in rest.chunks_exact_mut(rc * w) {
                c.copy_from_slice(first);
            }
            if rc >= 2 {
                for (j, blk) in buf.chunks_exact_mut(rc * w).enumerate() {
                    passes::row_levels(k, Bfly::Fft, blk, w, j * rc, top - 1);
                }
            }
        });
    }

    /// The input side's work on row r: the conversion inside the row and
    /// the levels < 16.
    fn input_row(&self, k: AnyKern, row: &mut [u64], r: usize) {
        convert::convert(k, row, 1, Conv::ToNovel);
        transform::top_down(k, Bfly::Fft, row, r * TAU);
    }

    /// The output side's work on row r (of a transform longer than one
    /// row): the transposed levels below `min(16, log2 M')`, block by block.
    fn output_row(&self, k: AnyKern, row: &mut [u64], r: usize) {
        let sub = self.mo.next_power_of_two().min(TAU);
        for (j, blk) in row.chunks_exact_mut(sub).enumerate() {
            transform::bottom_up(k, Bfly::FftT, blk, r * TAU + j * sub);
        }
    }

    /// The output side after its row pass: the transposed levels >= 16 and
    /// the sum over blocks, then `C^T` and the decoding.
    fn output_after_rows(&self, k: AnyKern, f: &mut [u64], out: &mut [u64]) {
        let sub = self.mo.next_power_of_two();
        let rows = self.len / TAU;
        if sub < TAU {
            // Sum the blocks of every row, then of all rows.
            let (first, rest) = f.split_at_mut(sub);
            for c in rest.chunks_exact(sub) {
                k.xor_into(first, c);
            }
            convert::convert(k, first, 1, Conv::ToNovelT);
            decode(&first[..self.mo], self.m, out);
            return;
        }
        let ro = sub / TAU;
        let top = sub.trailing_zeros();
        passes::col_pass(f, rows, ro, |buf, w| {
            if ro >= 2 {
                for (j, blk) in buf.chunks_exact_mut(ro * w).enumerate() {
                    passes::row_levels(k, Bfly::FftT, blk, w, j * ro, top - 1);
                }
            }
            let (first, rest) = buf.split_at_mut(ro * w);
            for c in rest.chunks_exact(ro * w) {
                k.xor_into(first, c);
            }
            buf.truncate(ro * w);
            convert::convert(k, buf, w, Conv::ToNovelT);
        });
        let head = &mut f[..sub];
        head.par_chunks_mut(TAU)
            .for_each(|row| convert::convert(k, row, 1, Conv::ToNovelT));
        if ro >= 2 {
            passes::taylor_pass(k, head, ro, Conv::ToNovelT);
        }
        decode(&head[..self.mo], self.m, out);
    }

    /// `acc ^= input . seed`: the transform-domain form of one Toeplitz
    /// block, to be summed over blocks and finished once
    /// ([`finish`](Self::finish)); `input` from
    /// [`transform_input`](Self::transform_input).
    ///
    /// # Panics
    /// On wrong lengths.
    pub fn accumulate(&self, acc: &mut [u64], input: &[u64], seed: &AfftSeed) {
        assert!(acc.len() == self.len && input.len() == self.len);
        assert_eq!(seed.spec.len(), self.len, "seed prepared for another plan");
        pointwise(AnyKern::new(self.backend), acc, &seed.spec, Some(input));
    }

    /// Turns a transform-domain product (consumed as scratch) into the m
    /// output bits.
    ///
    /// # Panics
    /// On wrong lengths.
    pub fn finish(&self, f: &mut [u64], out: &mut [u64]) {
        assert_eq!(f.len(), self.len, "transform length");
        assert_eq!(out.len(), words_for(self.m), "output words");
        let k = AnyKern::new(self.backend);
        if self.len > TAU {
            f.par_chunks_mut(TAU)
                .enumerate()
                .for_each(|(r, row)| self.output_row(k, row, r));
            self.output_after_rows(k, f, out);
            return;
        }
        let sub = transform::fft_t(k, f, self.mo);
        convert::convert(k, &mut f[..sub], 1, Conv::ToNovelT);
        decode(&f[..self.mo], self.m, out);
    }
}

/// The kernel chosen once per plan (a plain `match` per slice operation).
#[derive(Clone, Copy, Debug)]
pub enum AnyKern {
    /// [`kernel::Portable`].
    Portable,
    /// PCLMULQDQ on 128-bit registers.
    #[cfg(target_arch = "x86_64")]
    Pclmul(pclmul::Pclmul),
    /// AVX2 with VPCLMULQDQ on 256-bit registers.
    #[cfg(target_arch = "x86_64")]
    Vpclmul256(vpclmul256::Vpclmul256),
    /// AVX-512 with VPCLMULQDQ.
    #[cfg(target_arch = "x86_64")]
    Avx512(x86::Avx512),
}

impl AnyKern {
    /// The kernel for a backend (which must run here).
    pub fn new(backend: Backend) -> AnyKern {
        match backend {
            #[cfg(target_arch = "x86_64")]
            Backend::Vpclmul => AnyKern::Avx512(x86::Avx512::new().expect("detected")),
            #[cfg(target_arch = "x86_64")]
            Backend::Vpclmul256 => {
                AnyKern::Vpclmul256(vpclmul256::Vpclmul256::new().expect("detected"))
            }
            #[cfg(target_arch = "x86_64")]
            Backend::Pclmul => AnyKern::Pclmul(pclmul::Pclmul::new().expect("detected")),
            _ => AnyKern::Portable,
        }
    }
}

impl Kern for AnyKern {
    #[inline]
    fn bfly(self, kind: kernel::Bfly, a: &mut [u64], b: &mut [u64], l: u64) {
        match self {
            AnyKern::Portable => Portable.bfly(kind, a, b, l),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Pclmul(k) => k.bfly(kind, a, b, l),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Vpclmul256(k) => k.bfly(kind, a, b, l),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Avx512(k) => k.bfly(kind, a, b, l),
        }
    }
    #[inline]
    fn mul_assign(self, acc: &mut [u64], x: &[u64]) {
        match self {
            AnyKern::Portable => Portable.mul_assign(acc, x),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Pclmul(k) => k.mul_assign(acc, x),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Vpclmul256(k) => k.mul_assign(acc, x),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Avx512(k) => k.mul_assign(acc, x),
        }
    }
    #[inline]
    fn mul_acc(self, acc: &mut [u64], x: &[u64], y: &[u64]) {
        match self {
            AnyKern::Portable => Portable.mul_acc(acc, x, y),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Pclmul(k) => k.mul_acc(acc, x, y),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Vpclmul256(k) => k.mul_acc(acc, x, y),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Avx512(k) => k.mul_acc(acc, x, y),
        }
    }
    #[inline]
    fn xor_into(self, dst: &mut [u64], src: &[u64]) {
        match self {
            AnyKern::Portable => Portable.xor_into(dst, src),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Pclmul(k) => k.xor_into(dst, src),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Vpclmul256(k) => k.xor_into(dst, src),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Avx512(k) => k.xor_into(dst, src),
        }
    }
    #[inline]
    fn block(self, kind: kernel::Bfly, f: &mut [u64], pos: usize) {
        match self {
            AnyKern::Portable => Portable.block(kind, f, pos),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Pclmul(k) => k.block(kind, f, pos),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Vpclmul256(k) => k.block(kind, f, pos),
            #[cfg(target_arch = "x86_64")]
            AnyKern::Avx512(k) => k.block(kind, f, pos),
        }
    }
}

/// `acc *= s` pointwise, or `acc ^= s * x` with `x`; split between threads.
fn pointwise<K: Kern>(k: K, acc: &mut [u64], s: &[u64], x: Option<&[u64]>) {
    use rayon::prelude::*;
    const CH: usize = 1 << 14;
    match x {
        None => acc
            .par_chunks_mut(CH)
            .zip(s.par_chunks(CH))
            .for_each(|(a, b)| k.mul_assign(a, b)),
        Some(x) => acc
            .par_chunks_mut(CH)
            .zip(s.par_chunks(CH))
            .zip(x.par_chunks(CH))
            .for_each(|((a, b), c)| k.mul_acc(a, b, c)),
    }
}

/// `out[t]` = bits `[32 t - shift, 32 t - shift + 32)` of the `bits`-bit
/// string `src` (zero outside it).
fn shifted_chunks(src: &[u64], bits: usize, shift: usize, out: &mut [u64]) {
    let last = words_for(bits) - 1;
    let tail = match bits % 64 {
        0 => u64::MAX,
        r => (1u64 << r) - 1,
    };
    let get = |i: isize| -> u64 {
        if i < 0 || i as usize > last {
            0
        } else if i as usize == last {
            src[last] & tail
        } else {
            src[i as usize]
        }
    };
    let (qw, qb) = ((shift / 64) as isize, shift % 64);
    for (w, pair) in out.chunks_mut(2).enumerate() {
        let i = w as isize - qw;
        let word = if qb == 0 {
            get(i)
        } else {
            (get(i) << qb) | (get(i - 1) >> (64 - qb))
        };
        pair[0] = word & LOW;
        if let Some(hi) = pair.get_mut(1) {
            *hi = word >> 32;
        }
    }
}

/// `out[j] = X_(nx - 1 - j)` for `j < nx` (32-bit chunks of x, whose bits
/// beyond n are zero), zero above.
fn reversed_chunks(x: &[u64], nx: usize, out: &mut [u64]) {
    for (j, o) in out[..nx].iter_mut().enumerate() {
        let c = nx - 1 - j;
        *o = (x[c / 2] >> (32 * (c % 2))) & LOW;
    }
    out[nx..].fill(0);
}

/// Output chunk q is `low(c_(q+1)) ^ high(c_q)`; packs m bits into `out`.
fn decode(c: &[u64], m: usize, out: &mut [u64]) {
    let mc = m.div_ceil(CHUNK);
    let chunk = |q: usize| (c[q + 1] & LOW) ^ (c[q] >> 32);
    for (w, o) in out.iter_mut().enumerate() {
        let lo = chunk(2 * w);
        let hi = if 2 * w + 1 < mc { chunk(2 * w + 1) } else { 0 };
        *o = lo | (hi << 32);
    }
    if let Some(l) = out.last_mut() {
        if !m.is_multiple_of(64) {
            *l &= (1u64 << (m % 64)) - 1;
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gf2::reference;

    fn rand_words(seed: u64, bits: usize) -> Vec<u64> {
        let mut s = seed.wrapping_mul(0x2545_f491_4f6c_dd1d) | 1;
        let mut v: Vec<u64> = (0..words_for(bits))
            .map(|_| {
                s ^= s << 13;
                s ^= s >> 7;
                s ^= s << 17;
                s
            })
            .collect();
        if !bits.is_multiple_of(64) {
            *v.last_mut().unwrap() &= (1u64 << (bits % 64)) - 1;
        }
        v
    }

    fn window_oracle(s: &[u64], x: &[u64], n: usize, m: usize) -> Vec<u64> {
        let full = reference::mul_bitwise(s, x);
        let mut out = vec![0u64; words_for(m)];
        for i in 0..m {
            let k = n - 1 + i;
            if (full[k / 64] >> (k % 64)) & 1 == 1 {
                out[i / 64] |= 1 << (i % 64);
            }
        }
        out
    }

    #[test]
    fn window_matches_the_bitwise_product() {
        let sizes = [
            (1, 1),
            (2, 1),
            (2, 2),
            (31, 1),
            (32, 32),
            (33, 1),
            (33, 33),
            (64, 64),
            (65, 1),
            (100, 37),
            (129, 64),
            (700, 350),
            (1000, 999),
            (2048, 1024),
            (3001, 17),
            (64 * 40 + 3, 64 * 20 + 5),
        ];
        for be in Backend::all_supported() {
            for &(n, m) in &sizes {
                let plan = AfftWindow::new(n, m, be);
                let s = rand_words((n * 31 + m) as u64, n + m - 1);
                let x = rand_words((n * 7 + m * 3) as u64, n);
                let prep = plan.prepare(&s);
                let mut out = vec![0u64; words_for(m)];
                let mut scratch = vec![0xdead_beefu64; plan.scratch_len()];
                plan.compute(&prep, &x, &mut out, &mut scratch);
                assert_eq!(out, window_oracle(&s, &x, n, m), "{be:?} n={n} m={m}");
            }
        }
    }

    /// Sizes whose transform is longer than one row (the pass-structured
    /// path), against the Karatsuba engine (itself tested against the
    /// bitwise product), including an output shorter than one row and an
    /// input that does not fill its rows.
    #[test]
    fn large_windows_match_karatsuba() {
        use crate::gf2::middle::ToeplitzWindow;
        let sizes = [
            ((1 << 22) + 37, (1 << 21) - 5),
            (3 << 21, 1000),
            ((1 << 21) + 64 * 3, (1 << 22) + 1),
            (1 << 23, 1 << 22),
            (5 << 20, 1 << 19),
        ];
        for (i, &(n, m)) in sizes.iter().enumerate() {
            let s = rand_words(100 + i as u64, n + m - 1);
            let x = rand_words(200 + i as u64, n);
            let kara = ToeplitzWindow::new(n, m, Backend::detect());
            let mut want = vec![0u64; words_for(m)];
            let mut ks = vec![0u64; kara.scratch_len()];
            kara.compute(&kara.prepare(&s), &x, &mut want, &mut ks);
            for be in Backend::all_supported() {
                if be == Backend::Portable && n > 1 << 22 {
                    continue;
                }
                let plan = AfftWindow::new(n, m, be);
                assert!(plan.transform_len() > passes::TAU, "n={n} m={m}");
                let prep = plan.prepare(&s);
                let mut out = vec![0u64; words_for(m)];
                let mut scratch = vec![7u64; plan.scratch_len()];
                plan.compute(&prep, &x, &mut out, &mut scratch);
                assert!(out == want, "{be:?} n={n} m={m}");
                // The same through the transform-domain pieces.
                let mut f = vec![0u64; plan.transform_len()];
                plan.transform_input(&x, &mut f);
                let mut acc = vec![0u64; plan.transform_len()];
                plan.accumulate(&mut acc, &f, &prep);
                let mut out2 = vec![0u64; words_for(m)];
                plan.finish(&mut acc, &mut out2);
                assert!(out2 == want, "pieces {be:?} n={n} m={m}");
            }
        }
    }
}

//! The Toeplitz window by floating-point convolution (f64 FFT).
//!
//! The coefficients of `S(z) X(z)` over GF(2) are the parities of the integer
//! convolution `c = s * x` of the 0/1 sequences. A cyclic convolution of
//! length `L >= n + m - 1` gives the window `[n-1, n+m-1)` without
//! wrap-around: index `t` in the window receives `c_t` plus `c_{t+L}`, and
//! `t + L >= 2n + m - 2` exceeds the product's degree `2n + m - 3`.
//!
//! # Rounding can never flip a bit in the accepted sizes
//!
//! Every exact coefficient is an integer in `0 ..= n`; the computed value is
//! rounded to the nearest integer, so a bit can only flip if the error reaches
//! 1/2. For a power-of-two length `L = 2^k`, the error of an FFT-based product
//! of real vectors `x`, `y` is bounded by (C. Percival, "Rapid multiplication
//! modulo the sum and difference of highly composite numbers", Math. Comp. 72,
//! 2003, theorem on FFT multiplication error; statement from memory)
//!
//! ```text
//! |z' - z|_inf  <  |x|_2 |y|_2 ((1 + e)^(3k) (1 + e sqrt 5)^(3k + 1) (1 + b)^(3k) - 1)
//! ```
//!
//! with `e = 2^-53` the unit round-off and `b` the error of the precomputed
//! roots of unity (taken as `2^-51`, four ulps, as they come from f64 sin/cos).
//! For 0/1 vectors `|x|_2 <= sqrt(n)` and `|y|_2 <= sqrt(n + m - 1)`. The
//! analysis is for radix-2 Cooley-Tukey; the library used here mixes radices
//! and adds a real-to-complex step, so the plan accepts a size only if the
//! bound is below `2^-10`, 512 times under the 1/2 that would be needed, and
//! refuses larger sizes ([`FftWindow::new`] returns `None`). At the largest
//! sizes the tool plans (n = 2^24, m = 2^23) the bound is about `1e-6`.
//! As a second line of defence every computed coefficient is checked to lie
//! within 1/4 of an integer; a violation panics rather than return a wrong bit.

use realfft::num_complex::Complex;
use realfft::{ComplexToReal, RealFftPlanner, RealToComplex};
use std::sync::Arc;

/// Largest transform length accepted (memory: 2^27 f64 values = 1 GiB).
pub const MAX_LOG2_LEN: u32 = 27;

/// The bound on the absolute rounding error of one coefficient (see the
/// module docs), for a cyclic length `2^k` and 0/1 vectors of `nx` and `ny`
/// ones at most.
pub fn rounding_error_bound(k: u32, nx: usize, ny: usize) -> f64 {
    let e = 2f64.powi(-53);
    let b = 2f64.powi(-51);
    let k = k as f64;
    // (1+e)^(3k) (1+e sqrt5)^(3k+1) (1+b)^(3k) - 1, computed via ln_1p / exp_m1
    // so that the tiny excess over 1 is not lost.
    let ln =
        3.0 * k * e.ln_1p() + (3.0 * k + 1.0) * (e * 5f64.sqrt()).ln_1p() + 3.0 * k * b.ln_1p();
    (nx as f64).sqrt() * (ny as f64).sqrt() * ln.exp_m1()
}

/// Acceptance threshold for [`rounding_error_bound`].
pub const ACCEPTED_BOUND: f64 = 1.0 / 1024.0;

/// A plan for the Toeplitz window by FFT.
pub struct FftWindow {
    n: usize,
    m: usize,
    len: usize,
    fwd: Arc<dyn RealToComplex<f64>>,
    inv: Arc<dyn ComplexToReal<f64>>,
}

impl std::fmt::Debug for FftWindow {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.debug_struct("FftWindow")
            .field("n", &self.n)
            .field("m", &self.m)
            .field("len", &self.len)
            .finish()
    }
}

/// The seed's spectrum, computed once per seed.
#[derive(Clone, Default)]
pub struct FftSeed {
    spectrum: Vec<Complex<f64>>,
}

/// Caller-owned scratch for [`FftWindow::compute`].
pub struct FftScratch {
    real: Vec<f64>,
    spec: Vec<Complex<f64>>,
    fft_scratch: Vec<Complex<f64>>,
}

impl FftWindow {
    /// Plans the window for an `n`-bit input and `m` output bits, or `None`
    /// when the size is outside what the rounding bound covers.
    pub fn new(n: usize, m: usize) -> Option<Self> {
        if !Self::accepts(n, m) {
            return None;
        }
        let len = Self::transform_len(n, m);
        let mut planner = RealFftPlanner::<f64>::new();
        let fwd = planner.plan_fft_forward(len);
        let inv = planner.plan_fft_inverse(len);
        Some(FftWindow {
            n,
            m,
            len,
            fwd,
            inv,
        })
    }

    /// Whether the rounding bound covers an `n`-bit input and `m` output
    /// bits (see the module docs).
    pub fn accepts(n: usize, m: usize) -> bool {
        assert!(n >= 1 && m >= 1, "fft window needs n >= 1 and m >= 1");
        let len = Self::transform_len(n, m);
        let k = len.trailing_zeros();
        k <= MAX_LOG2_LEN && rounding_error_bound(k, n, n + m - 1) < ACCEPTED_BOUND
    }

    fn transform_len(n: usize, m: usize) -> usize {
        (n + m - 1).next_power_of_two().max(2)
    }

    /// Input bits n.
    pub fn input_bits(&self) -> usize {
        self.n
    }

    /// Output bits m.
    pub fn output_bits(&self) -> usize {
        self.m
    }

    /// Transform length.
    pub fn len(&self) -> usize {
        self.len
    }

    /// Whether the transform is empty (never: lengths are at least 2).
    pub fn is_empty(&self) -> bool {
        false
    }

    /// Fresh scratch for this plan.
    pub fn make_scratch(&self) -> FftScratch {
        let sl = self.fwd.get_scratch_len().max(self.inv.get_scratch_len());
        FftScratch {
            real: vec![0.0; self.len],
            spec: vec![Complex::new(0.0, 0.0); self.len / 2 + 1],
            fft_scratch: vec![Complex::new(0.0, 0.0); sl],
        }
    }

    /// Transforms a seed of `n + m - 1` bits (words, bits beyond zero).
    pub fn prepare(&self, seed: &[u64]) -> FftSeed {
        let mut s = self.make_scratch();
        let mut out = FftSeed {
            spectrum: Vec::new(),
        };
        self.prepare_into(seed, &mut out, &mut s);
        out
    }

    /// As [`prepare`](Self::prepare), reusing `into` and `s` (no allocation
    /// once they have the plan's sizes).
    pub fn prepare_into(&self, seed: &[u64], into: &mut FftSeed, s: &mut FftScratch) {
        load_bits(seed, self.n + self.m - 1, &mut s.real);
        self.fwd
            .process_with_scratch(&mut s.real, &mut s.spec, &mut s.fft_scratch)
            .expect("buffer sizes come from the plan");
        into.spectrum.clear();
        into.spectrum.extend_from_slice(&s.spec);
    }

    /// Computes the window for input words `x` into `out` (`ceil(m/64)`
    /// words).
    ///
    /// # Panics
    /// On wrong lengths, or if a coefficient is not within 1/4 of an integer
    /// (which the rounding bound rules out).
    pub fn compute(&self, seed: &FftSeed, x: &[u64], out: &mut [u64], s: &mut FftScratch) {
        assert_eq!(out.len(), self.m.div_ceil(64), "output words");
        load_bits(x, self.n, &mut s.real);
        self.fwd
            .process_with_scratch(&mut s.real, &mut s.spec, &mut s.fft_scratch)
            .expect("buffer sizes come from the plan");
        for (v, w) in s.spec.iter_mut().zip(&seed.spectrum) {
            *v *= *w;
        }
        // The real-to-complex convention needs purely real DC and Nyquist
        // terms; the product of two such spectra keeps them real up to
        // rounding, which is cleared here.
        s.spec[0].im = 0.0;
        let last = s.spec.len() - 1;
        s.spec[last].im = 0.0;
        self.inv
            .process_with_scratch(&mut s.spec, &mut s.real, &mut s.fft_scratch)
            .expect("buffer sizes come from the plan");
        let scale = 1.0 / self.len as f64;
        out.fill(0);
        let mut worst = 0.0f64;
        for i in 0..self.m {
            let v = s.real[self.n - 1 + i] * scale;
            let r = v.round();
            worst = worst.max((v - r).abs());
            if (r as i64) & 1 == 1 {
                out[i / 64] |= 1 << (i % 64);
            }
        }
        assert!(
            worst < 0.25,
            "FFT rounding error {worst} exceeds 1/4 (n = {}, m = {}): refusing to return bits",
            self.n,
            self.m
        );
    }
}

/// Writes bits `0..nbits` of `words` as 0.0/1.0 into `dst`, zero beyond.
fn load_bits(words: &[u64], nbits: usize, dst: &mut [f64]) {
    for (i, chunk) in dst[..nbits].chunks_mut(64).enumerate() {
        let w = words[i];
        for (j, d) in chunk.iter_mut().enumerate() {
            *d = ((w >> j) & 1) as f64;
        }
    }
    dst[nbits..].fill(0.0);
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gf2::middle::ToeplitzWindow;
    use crate::gf2::Backend;

    #[test]
    fn bound_accepts_planned_sizes_and_grows_with_size() {
        let small = rounding_error_bound(11, 1024, 1535);
        let big = rounding_error_bound(25, 1 << 24, 3 << 23);
        assert!(small < big);
        assert!(big < 1e-5, "bound at 2^24: {big}");
        assert!(FftWindow::accepts(1 << 24, 1 << 23));
        // A transform longer than 2^27 is refused.
        assert!(!FftWindow::accepts(1 << 27, 1 << 26));
    }

    #[test]
    fn fft_window_agrees_with_middle_product() {
        let mut st = 0x1234_5678_9abc_def1u64;
        let mut next = || {
            st ^= st << 13;
            st ^= st >> 7;
            st ^= st << 17;
            st
        };
        for &(n, m) in &[
            (1usize, 1usize),
            (3, 2),
            (64, 1),
            (200, 200),
            (1000, 500),
            (4097, 2049),
        ] {
            let sbits = n + m - 1;
            let mut s: Vec<u64> = (0..sbits.div_ceil(64)).map(|_| next()).collect();
            let mut x: Vec<u64> = (0..n.div_ceil(64)).map(|_| next()).collect();
            if !sbits.is_multiple_of(64) {
                *s.last_mut().unwrap() &= (1 << (sbits % 64)) - 1;
            }
            if !n.is_multiple_of(64) {
                *x.last_mut().unwrap() &= (1 << (n % 64)) - 1;
            }
            let f = FftWindow::new(n, m).unwrap();
            let fs = f.prepare(&s);
            let mut sc = f.make_scratch();
            let mut a = vec![0u64; m.div_ceil(64)];
            f.compute(&fs, &x, &mut a, &mut sc);
            let w = ToeplitzWindow::new(n, m, Backend::Portable);
            let ws = w.prepare(&s);
            let mut b = vec![0u64; m.div_ceil(64)];
            let mut scratch = vec![0u64; w.scratch_len()];
            w.compute(&ws, &x, &mut b, &mut scratch);
            assert_eq!(a, b, "n={n} m={m}");
        }
    }
}

//! Toeplitz hashing: a two-universal family with a seed of n + m - 1 bits.
//!
//! Definition (`spec/conventions.md`, "Toeplitz hashing"): for input x of n
//! bits and seed s of n + m - 1 bits, `y_i = XOR_j s_{i - j + n - 1} x_j`,
//! equivalently the coefficients `n - 1 .. n + m - 2` of `S(z) X(z)`.
//! Two-universality: `spec/hashing-and-composition.md` 3.1 (the family is the
//! classical Toeplitz hash of Mansour, Nisan and Tiwari, and of Krawczyk,
//! "LFSR-based hashing and authentication", CRYPTO '94).
//!
//! Engines ([`crate::gf2::window`]): the word-level Karatsuba middle product
//! on any carry-less backend, the floating-point FFT convolution, or the
//! additive FFT over GF(2^64); `Engine::Auto` picks by size. All give the
//! same bits; the tests compare them with [`super::reference::toeplitz`].

use super::{check_len, Engine, Error, Extractor, ScratchPool, SeededExtractor};
use crate::bits::Bits;
use crate::gf2::window::{Window, WindowScratch, WindowSeed};

/// A Toeplitz hashing plan for fixed n, m and engine.
pub struct Toeplitz {
    n: usize,
    m: usize,
    window: Window,
    pool: ScratchPool<(WindowScratch, WindowSeed)>,
}

impl Toeplitz {
    /// Plans Toeplitz hashing of n bits to m bits on the engine chosen by
    /// size on this CPU.
    pub fn new(n: usize, m: usize) -> Result<Self, Error> {
        Self::with_engine(n, m, Engine::Auto)
    }

    /// Plans with a given engine.
    pub fn with_engine(n: usize, m: usize, engine: Engine) -> Result<Self, Error> {
        check_sizes("toeplitz", n, m, n)?;
        Self::any_shape(n, m, engine)
    }

    /// An m x n Toeplitz matrix of any shape (m > n allowed), as the tail of
    /// modified Toeplitz hashing needs; not a two-universal family when
    /// m > n, so not public.
    pub(crate) fn any_shape(n: usize, m: usize, engine: Engine) -> Result<Self, Error> {
        check_sizes("toeplitz", n, m, usize::MAX)?;
        Ok(Toeplitz {
            n,
            m,
            window: Window::new(n, m, engine)?,
            pool: ScratchPool::new(),
        })
    }

    /// The engine this plan runs on.
    pub fn engine(&self) -> Engine {
        self.window.engine()
    }

    fn prepare(&self, seed: &Bits) -> WindowSeed {
        check_len("toeplitz seed", self.seed_bits(), seed.len());
        self.window.prepare(seed.words())
    }

    /// Hashes one block with a prepared seed, or with a raw one prepared in
    /// the pooled scratch.
    fn run(
        &self,
        seed: Option<&WindowSeed>,
        raw_seed: Option<&Bits>,
        input: &Bits,
        out: &mut Bits,
    ) {
        check_len("toeplitz input", self.n, input.len());
        check_len("toeplitz output", self.m, out.len());
        self.pool.with(
            || (self.window.make_scratch(), WindowSeed::default()),
            |(scratch, own)| {
                let ps = match (seed, raw_seed) {
                    (Some(p), _) => p,
                    (None, Some(raw)) => {
                        self.window.prepare_into(raw.words(), own, scratch);
                        &*own
                    }
                    (None, None) => unreachable!("a seed is given"),
                };
                self.window
                    .compute(ps, input.words(), out.words_mut(), scratch);
            },
        )
    }
}

impl Extractor for Toeplitz {
    fn name(&self) -> &'static str {
        "toeplitz"
    }
    fn engine(&self) -> Option<Engine> {
        Some(Toeplitz::engine(self))
    }
    fn input_bits(&self) -> usize {
        self.n
    }
    fn output_bits(&self) -> usize {
        self.m
    }
    fn seed_bits(&self) -> usize {
        self.n + self.m - 1
    }
    fn extract(&self, input: &Bits, seed: &Bits, out: &mut Bits) {
        check_len("toeplitz seed", self.seed_bits(), seed.len());
        self.run(None, Some(seed), input, out)
    }
    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a> {
        Box::new(Seeded {
            plan: self,
            seed: self.prepare(seed),
        })
    }
}

struct Seeded<'a> {
    plan: &'a Toeplitz,
    seed: WindowSeed,
}

impl SeededExtractor for Seeded<'_> {
    fn extract(&self, input: &Bits, out: &mut Bits) {
        self.plan.run(Some(&self.seed), None, input, out)
    }
}

/// Checks `1 <= m <= max_m` and `n >= 1`.
pub(crate) fn check_sizes(
    family: &'static str,
    n: usize,
    m: usize,
    max_m: usize,
) -> Result<(), Error> {
    if n == 0 {
        return Err(Error::EmptyInput { family });
    }
    if m == 0 || m > max_m {
        return Err(Error::OutputLength {
            family,
            n,
            m,
            max: max_m,
        });
    }
    Ok(())
}

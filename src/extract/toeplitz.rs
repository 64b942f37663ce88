//! Toeplitz hashing: a two-universal family with a seed of n + m - 1 bits.
//!
//! Definition (`spec/conventions.md`, "Toeplitz hashing"): for input x of n
//! bits and seed s of n + m - 1 bits, `y_i = XOR_j s_{i - j + n - 1} x_j`,
//! equivalently the coefficients `n - 1 .. n + m - 2` of `S(z) X(z)`.
//! Two-universality: `spec/hashing-and-composition.md` 3.1 (the family is the
//! classical Toeplitz hash of Mansour, Nisan and Tiwari, and of Krawczyk,
//! "LFSR-based hashing and authentication", CRYPTO '94).
//!
//! Engines: the word-level middle product ([`crate::gf2::middle`]) on any
//! carry-less backend, or the FFT convolution ([`crate::gf2::fft`]). All give
//! the same bits; the tests compare them with [`super::reference::toeplitz`].

use super::{check_len, Engine, Error, Extractor, ScratchPool, SeededExtractor};
use crate::bits::Bits;
use crate::gf2::fft::{FftScratch, FftSeed, FftWindow};
use crate::gf2::middle::{PreparedSeed, ToeplitzWindow};

/// A Toeplitz hashing plan for fixed n, m and engine.
pub struct Toeplitz {
    inner: Inner,
    engine: Engine,
    pool: ScratchPool<Scratch>,
}

enum Inner {
    Clmul(ToeplitzWindow),
    Fft(FftWindow),
}

/// Per-call working space (pooled).
enum Scratch {
    Clmul { words: Vec<u64>, seed: PreparedSeed },
    Fft { fft: FftScratch, seed: FftSeed },
}

/// A seed prepared for one plan.
enum Prepared {
    Clmul(PreparedSeed),
    Fft(FftSeed),
}

impl Toeplitz {
    /// Plans Toeplitz hashing of n bits to m bits on the fastest engine of
    /// this CPU.
    pub fn new(n: usize, m: usize) -> Result<Self, Error> {
        Self::with_engine(n, m, Engine::detect())
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
        let inner = match engine {
            Engine::Clmul(be) => {
                if !be.is_supported() {
                    return Err(Error::Unsupported(engine));
                }
                Inner::Clmul(ToeplitzWindow::new(n, m, be))
            }
            Engine::Fft => Inner::Fft(FftWindow::new(n, m).ok_or(Error::FftTooLarge { n, m })?),
        };
        Ok(Toeplitz {
            inner,
            engine,
            pool: ScratchPool::new(),
        })
    }

    /// The engine this plan runs on.
    pub fn engine(&self) -> Engine {
        self.engine
    }

    fn make_scratch(&self) -> Scratch {
        match &self.inner {
            Inner::Clmul(w) => Scratch::Clmul {
                words: vec![0; w.scratch_len()],
                seed: PreparedSeed::default(),
            },
            Inner::Fft(f) => Scratch::Fft {
                fft: f.make_scratch(),
                seed: FftSeed::default(),
            },
        }
    }

    fn prepare(&self, seed: &Bits) -> Prepared {
        check_len("toeplitz seed", self.seed_bits(), seed.len());
        match &self.inner {
            Inner::Clmul(w) => Prepared::Clmul(w.prepare(seed.words())),
            Inner::Fft(f) => Prepared::Fft(f.prepare(seed.words())),
        }
    }

    /// Hashes input words (n bits) with a prepared seed into output words.
    fn run(&self, seed: Option<&Prepared>, raw_seed: Option<&Bits>, input: &Bits, out: &mut Bits) {
        check_len("toeplitz input", self.input_bits(), input.len());
        check_len("toeplitz output", self.output_bits(), out.len());
        self.pool.with(
            || self.make_scratch(),
            |sc| match (&self.inner, sc) {
                (Inner::Clmul(w), Scratch::Clmul { words, seed: own }) => {
                    let ps = match (seed, raw_seed) {
                        (Some(Prepared::Clmul(p)), _) => p,
                        (_, Some(raw)) => {
                            w.prepare_into(raw.words(), own);
                            &*own
                        }
                        _ => unreachable!("seed kind matches the plan"),
                    };
                    w.compute(ps, input.words(), out.words_mut(), words);
                }
                (Inner::Fft(f), Scratch::Fft { fft, seed: own }) => {
                    let ps = match (seed, raw_seed) {
                        (Some(Prepared::Fft(p)), _) => p,
                        (_, Some(raw)) => {
                            f.prepare_into(raw.words(), own, fft);
                            &*own
                        }
                        _ => unreachable!("seed kind matches the plan"),
                    };
                    f.compute(ps, input.words(), out.words_mut(), fft);
                }
                _ => unreachable!("scratch kind matches the plan"),
            },
        )
    }
}

impl Extractor for Toeplitz {
    fn name(&self) -> &'static str {
        "toeplitz"
    }
    fn input_bits(&self) -> usize {
        match &self.inner {
            Inner::Clmul(w) => w.input_bits(),
            Inner::Fft(f) => f.input_bits(),
        }
    }
    fn output_bits(&self) -> usize {
        match &self.inner {
            Inner::Clmul(w) => w.output_bits(),
            Inner::Fft(f) => f.output_bits(),
        }
    }
    fn seed_bits(&self) -> usize {
        self.input_bits() + self.output_bits() - 1
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
    seed: Prepared,
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

//! Modified Toeplitz hashing `[I_m | T']`: two-universal with a seed of only
//! n - 1 bits.
//!
//! Definition (`spec/conventions.md`, "Modified Toeplitz hashing"): split x
//! into `x_head = x_0 .. x_{m-1}` and `x_tail = x_m .. x_{n-1}`; with `T'` the
//! m x (n - m) Toeplitz matrix of the n - 1 seed bits,
//! `y = x_head XOR T' x_tail`. The family is that of Hayashi and Tsurumaru,
//! "More efficient privacy amplification with less random seeds via dual
//! universal hash function", IEEE Trans. Inf. Theory 62(4), 2016; its
//! two-universality is derived in `spec/hashing-and-composition.md` 3.2.

use super::toeplitz::check_sizes;
use super::{check_len, Engine, Error, Extractor, ScratchPool, SeededExtractor, Toeplitz};
use crate::bits::Bits;

/// A modified Toeplitz hashing plan for fixed n, m and engine.
pub struct ModifiedToeplitz {
    n: usize,
    m: usize,
    /// Toeplitz hashing of the tail: n - m bits to m bits, seed n - 1 bits.
    tail: Toeplitz,
    pool: ScratchPool<(Bits, Bits)>,
}

impl ModifiedToeplitz {
    /// Plans modified Toeplitz hashing of n bits to m bits (`1 <= m < n`) on
    /// the fastest engine of this CPU.
    pub fn new(n: usize, m: usize) -> Result<Self, Error> {
        Self::with_engine(n, m, Engine::detect())
    }

    /// Plans with a given engine.
    pub fn with_engine(n: usize, m: usize, engine: Engine) -> Result<Self, Error> {
        check_sizes("modified-toeplitz", n, m, n.saturating_sub(1))?;
        Ok(ModifiedToeplitz {
            n,
            m,
            tail: Toeplitz::any_shape(n - m, m, engine)?,
            pool: ScratchPool::new(),
        })
    }

    /// The engine this plan runs on.
    pub fn engine(&self) -> Engine {
        self.tail.engine()
    }

    fn run(&self, input: &Bits, out: &mut Bits, hash_tail: impl FnOnce(&Bits, &mut Bits)) {
        check_len("modified toeplitz input", self.n, input.len());
        check_len("modified toeplitz output", self.m, out.len());
        self.pool.with(
            || (Bits::zeros(self.n - self.m), Bits::zeros(self.m)),
            |(tail, head)| {
                input.copy_range_into(self.m, tail);
                hash_tail(tail, out);
                input.copy_range_into(0, head);
                out.xor_prefix(head);
            },
        )
    }
}

impl Extractor for ModifiedToeplitz {
    fn name(&self) -> &'static str {
        "modified-toeplitz"
    }
    fn engine(&self) -> Option<Engine> {
        Some(ModifiedToeplitz::engine(self))
    }
    fn input_bits(&self) -> usize {
        self.n
    }
    fn output_bits(&self) -> usize {
        self.m
    }
    fn seed_bits(&self) -> usize {
        self.n - 1
    }
    fn extract(&self, input: &Bits, seed: &Bits, out: &mut Bits) {
        check_len("modified toeplitz seed", self.n - 1, seed.len());
        self.run(input, out, |tail, o| self.tail.extract(tail, seed, o))
    }
    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a> {
        check_len("modified toeplitz seed", self.n - 1, seed.len());
        Box::new(Seeded {
            plan: self,
            tail: self.tail.with_seed(seed),
        })
    }
}

struct Seeded<'a> {
    plan: &'a ModifiedToeplitz,
    tail: Box<dyn SeededExtractor + 'a>,
}

impl SeededExtractor for Seeded<'_> {
    fn extract(&self, input: &Bits, out: &mut Bits) {
        self.plan
            .run(input, out, |tail, o| self.tail.extract(tail, o))
    }
}

//! The seedless cyclic-shift two-source extractor
//! (`spec/hashing-and-composition.md` 6; the construction of Dodis, Elbaz,
//! Oliveira and Raz, "Improved randomness extraction from two independent
//! sources", RANDOM 2004).
//!
//! **There is no uniform seed here.** The extractor takes two *raw* sources
//! of n bits each, X and Y. To fit the crate's [`Extractor`] trait, Y is
//! passed where the trait takes the seed (so `seed_bits() == n`), but Y is the
//! *second raw source*, not a uniform seed: it needs only min-entropy, and the
//! security statement (6.3) requires that **X and Y are independent** and that
//! any side information is **classical only** (for each value of it the
//! sources stay independent). Nothing is proved here against quantum side
//! information (6.4 is unverified and is not used by this module).
//!
//! Definition (6.2, normative direction): for `i = 0 .. m-1`,
//!
//! ```text
//! z_i = XOR over j = 0 .. n-1 of ( x_j AND y_{(i + j) mod n} )
//! ```
//!
//! with n a prime that has 2 as a primitive root (6.1) and `1 <= m <= n - 1`.
//!
//! Fast path. The polynomial form of 6.2 is `z_i = [z^i] Xrev(z) Y(z) mod
//! (z^n - 1)`. Reducing modulo `z^n - 1` is a cyclic fold, and it is done on
//! Y instead of on the product: with `x'` the reversal of x
//! (`x'_t = x_{n-1-t}`) and `s` the cyclic extension of y to `n + m - 1` bits
//! (`s_t = y_{t mod n}`),
//!
//! ```text
//! z_i = XOR_t x'_t s_{i - t + n - 1},
//! ```
//!
//! which is Toeplitz hashing of `x'` with seed `s` (`spec/conventions.md`):
//! the window `[n-1, n+m-1)` of the carry-less product `S(z) X'(z)`. It is
//! computed by the crate's word-level Karatsuba middle product
//! ([`crate::gf2::middle`]) or FFT convolution ([`crate::gf2::fft`]), which
//! compute only the m output coefficients and never allocate after planning
//! (the full product plus fold through [`crate::gf2::karatsuba::mul`]
//! allocates inside its recursion). Reversal and extension are word-level
//! (`u64::reverse_bits` and shifts) into pooled scratch. The slow twin is
//! [`super::reference::two_source`], the definition itself.

use super::{check_len, Engine, Error, Extractor, ScratchPool, SeededExtractor};
use crate::bits::{words_for, Bits};
use crate::gf2::window::{Window, WindowScratch, WindowSeed};

/// Why a two-source plan cannot be made.
#[derive(Debug, thiserror::Error, PartialEq, Eq)]
pub enum TwoSourceError {
    /// n is not a prime with 2 as a primitive root.
    #[error(
        "two-source: n = {n} is not a valid length (it must be a prime with 2 as a primitive \
         root modulo n; Dodis, Elbaz, Oliveira, Raz 2004){}",
        match .largest_below { Some(v) => format!("; the largest valid n not above {n} is {v}"), None => String::new() }
    )]
    InvalidLength {
        /// The length asked for.
        n: usize,
        /// The largest valid length not above it, if any.
        largest_below: Option<u64>,
    },
    /// m outside `1 ..= n - 1`, or the engine cannot run.
    #[error(transparent)]
    Plan(#[from] Error),
}

/// Family name on the command line and in vector files.
pub const NAME: &str = "two-source";

/// A plan of the cyclic-shift two-source extractor for fixed n, m, engine.
pub struct TwoSource {
    n: usize,
    m: usize,
    window: Window,
    pool: ScratchPool<Scratch>,
}

/// Per-call working space (pooled): reversed x, extended y, the window's
/// own scratch and a prepared-seed buffer.
struct Scratch {
    xrev: Vec<u64>,
    ext: Vec<u64>,
    window: WindowScratch,
    seed: WindowSeed,
}

impl TwoSource {
    /// Plans the extractor for two n-bit sources and m output bits on the
    /// fastest carry-less backend of this CPU.
    pub fn new(n: usize, m: usize) -> Result<Self, TwoSourceError> {
        Self::with_engine(n, m, Engine::detect())
    }

    /// Plans with a given engine.
    pub fn with_engine(n: usize, m: usize, engine: Engine) -> Result<Self, TwoSourceError> {
        if !valid_n(n as u64) {
            return Err(TwoSourceError::InvalidLength {
                n,
                largest_below: largest_n(n as u64),
            });
        }
        if m == 0 || m >= n {
            return Err(Error::OutputLength {
                family: NAME,
                n,
                m,
                max: n - 1,
            }
            .into());
        }
        Ok(TwoSource {
            n,
            m,
            window: Window::new(n, m, engine).map_err(Error::from)?,
            pool: ScratchPool::new(),
        })
    }

    /// The engine this plan runs on.
    pub fn engine(&self) -> Engine {
        self.window.engine()
    }

    fn make_scratch(&self) -> Scratch {
        Scratch {
            xrev: vec![0; words_for(self.n)],
            ext: vec![0; words_for(self.n + self.m - 1)],
            window: self.window.make_scratch(),
            seed: WindowSeed::default(),
        }
    }

    fn prepare(&self, y: &Bits) -> WindowSeed {
        check_len("two-source second source", self.n, y.len());
        let mut ext = vec![0; words_for(self.n + self.m - 1)];
        cyclic_extend(y.words(), self.n, self.n + self.m - 1, &mut ext);
        self.window.prepare(&ext)
    }

    fn run(&self, bound: Option<&WindowSeed>, y: Option<&Bits>, x: &Bits, out: &mut Bits) {
        check_len("two-source first source", self.n, x.len());
        check_len("two-source output", self.m, out.len());
        let (n, d) = (self.n, self.n + self.m - 1);
        self.pool.with(
            || self.make_scratch(),
            |sc| {
                reverse_bits_into(x.words(), n, &mut sc.xrev);
                let ps = match bound {
                    Some(p) => p,
                    None => {
                        let y = y.expect("a second source is given");
                        cyclic_extend(y.words(), n, d, &mut sc.ext);
                        self.window
                            .prepare_into(&sc.ext, &mut sc.seed, &mut sc.window);
                        &sc.seed
                    }
                };
                self.window
                    .compute(ps, &sc.xrev, out.words_mut(), &mut sc.window);
            },
        )
    }
}

impl Extractor for TwoSource {
    fn name(&self) -> &'static str {
        NAME
    }
    fn input_bits(&self) -> usize {
        self.n
    }
    fn output_bits(&self) -> usize {
        self.m
    }
    /// n: the length of the **second raw source** Y, which travels in the
    /// trait's seed slot. It is not a uniform seed (see the module docs).
    fn seed_bits(&self) -> usize {
        self.n
    }
    /// `input` is the source X, `seed` is the second source Y (n bits,
    /// independent of X; not a uniform seed).
    fn extract(&self, input: &Bits, seed: &Bits, out: &mut Bits) {
        check_len("two-source second source", self.n, seed.len());
        self.run(None, Some(seed), input, out)
    }
    /// Binds the second source Y (not a uniform seed) for many X.
    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a> {
        Box::new(Seeded {
            plan: self,
            y: self.prepare(seed),
        })
    }
}

struct Seeded<'a> {
    plan: &'a TwoSource,
    y: WindowSeed,
}

impl SeededExtractor for Seeded<'_> {
    fn extract(&self, input: &Bits, out: &mut Bits) {
        self.plan.run(Some(&self.y), None, input, out)
    }
}

/// `out = x'` with `x'_t = x_{n-1-t}` (n bits of `x`, bits beyond n zero;
/// `out` has `ceil(n/64)` words).
fn reverse_bits_into(x: &[u64], n: usize, out: &mut [u64]) {
    let b = words_for(n);
    debug_assert!(x.len() == b && out.len() == b);
    // Reversing all 64 b bits puts x_{n-1-t} at position t + pad.
    let pad = b * 64 - n;
    for (o, w) in out.iter_mut().zip(x.iter().rev()) {
        *o = w.reverse_bits();
    }
    if pad > 0 {
        for k in 0..b {
            let hi = if k + 1 < b {
                out[k + 1] << (64 - pad)
            } else {
                0
            };
            out[k] = (out[k] >> pad) | hi;
        }
    }
}

/// `out = s` with `s_t = y_{t mod n}` for `t < d`, `n <= d <= 2 n`
/// (`out` has `ceil(d/64)` words; bits beyond d zero).
fn cyclic_extend(y: &[u64], n: usize, d: usize, out: &mut [u64]) {
    debug_assert!(n <= d && d <= 2 * n && out.len() == words_for(d));
    let b = words_for(n);
    out.fill(0);
    out[..b].copy_from_slice(&y[..b]);
    // OR in y shifted left by n bits (the low bits of y land from bit n on).
    let (q, r) = (n / 64, n % 64);
    for (k, &w) in y[..b].iter().enumerate() {
        let i = k + q;
        if i >= out.len() {
            break;
        }
        out[i] |= w << r;
        if r > 0 && i + 1 < out.len() {
            out[i + 1] |= w >> (64 - r);
        }
    }
    if !d.is_multiple_of(64) {
        let last = out.len() - 1;
        out[last] &= (1u64 << (d % 64)) - 1;
    }
}

/// Whether n is a valid length: a prime with 2 as a primitive root modulo n,
/// checked as `2^((n-1)/q) mod n != 1` for every prime q dividing n - 1
/// (`spec/hashing-and-composition.md` 6.1 and 9 item 11; \[DEOR04\], memory).
pub fn valid_n(n: u64) -> bool {
    if n < 3 || !super::trevisan::design::is_prime(n) {
        return false;
    }
    let mut rest = n - 1;
    let mut q = 2u64;
    while q * q <= rest {
        if rest.is_multiple_of(q) {
            if pow_mod(2, (n - 1) / q, n) == 1 {
                return false;
            }
            while rest.is_multiple_of(q) {
                rest /= q;
            }
        }
        q += 1;
    }
    !(rest > 1 && pow_mod(2, (n - 1) / rest, n) == 1)
}

fn pow_mod(mut b: u64, mut e: u64, n: u64) -> u64 {
    let n = n as u128;
    let mut r: u128 = 1;
    let mut b128 = b as u128 % n;
    while e > 0 {
        if e & 1 == 1 {
            r = r * b128 % n;
        }
        b128 = b128 * b128 % n;
        e >>= 1;
    }
    b = r as u64;
    b
}

/// The largest valid n not above `limit`, if any
/// (`spec/hashing-and-composition.md` 6.1 and 9 item 11).
pub fn largest_n(limit: u64) -> Option<u64> {
    (3..=limit).rev().find(|&n| valid_n(n))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reverse_and_extend_by_bits() {
        for n in [1usize, 3, 13, 63, 64, 65, 127, 128, 200] {
            let x = Bits::from_bools(&(0..n).map(|i| (i * 7 + i / 3) % 5 < 2).collect::<Vec<_>>());
            let mut r = vec![0; words_for(n)];
            reverse_bits_into(x.words(), n, &mut r);
            let r = Bits::from_words(r, n);
            for t in 0..n {
                assert_eq!(r.get(t), x.get(n - 1 - t), "reverse n={n} t={t}");
            }
            for d in [n, n + n / 2, 2 * n - 1] {
                let mut s = vec![0; words_for(d)];
                cyclic_extend(x.words(), n, d, &mut s);
                let s = Bits::from_words(s, d);
                for t in 0..d {
                    assert_eq!(s.get(t), x.get(t % n), "extend n={n} d={d} t={t}");
                }
            }
        }
    }

    #[test]
    fn refuses_invalid_lengths() {
        // 7: prime, but 2 has order 3 mod 7 (spec 6.1); 1024: not prime.
        let e = TwoSource::new(7, 3).err().unwrap();
        assert_eq!(
            e,
            TwoSourceError::InvalidLength {
                n: 7,
                largest_below: Some(5)
            }
        );
        assert!(
            e.to_string().contains("largest valid n not above 7 is 5"),
            "{e}"
        );
        let e = TwoSource::new(1024, 10).err().unwrap();
        assert!(e.to_string().contains("1019"), "{e}");
        assert!(matches!(
            TwoSource::new(2, 1).err().unwrap(),
            TwoSourceError::InvalidLength {
                largest_below: None,
                ..
            }
        ));
        // m = n is refused (spec 6.1: the rank property fails), as is m = 0.
        assert!(matches!(
            TwoSource::new(13, 13).err().unwrap(),
            TwoSourceError::Plan(Error::OutputLength { max: 12, .. })
        ));
        assert!(TwoSource::new(13, 0).is_err());
        assert!(TwoSource::new(13, 12).is_ok());
    }
}

//! Deterministic pseudo-random data for tests, benchmarks and timing: the
//! one generator every test, bench and calibration of this crate uses.
//!
//! xorshift64 with shifts (13, 7, 17) (Marsaglia, "Xorshift RNGs", Journal
//! of Statistical Software 8(14), 2003; common practice for test data). It
//! is seeded so that a failure can be replayed. **Never** use it for a
//! seed, an identifier or anything secret: those come from the operating
//! system (`files::os_random`).

use super::Bits;

/// A seeded xorshift64 generator (state never zero).
#[derive(Clone, Debug)]
pub struct Pseudo(pub u64);

impl Pseudo {
    /// A generator from `seed` (0 is replaced by 1: the all-zero state is
    /// fixed).
    pub fn new(seed: u64) -> Pseudo {
        Pseudo(seed.max(1))
    }

    /// The next 64 bits.
    #[allow(clippy::should_implement_trait)]
    pub fn next(&mut self) -> u64 {
        if self.0 == 0 {
            self.0 = 1;
        }
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }

    /// A number below `n` (`n > 0`; the slight modulo bias is irrelevant
    /// for test data).
    pub fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }

    /// `n` bytes (the low byte of each step).
    pub fn bytes(&mut self, n: usize) -> Vec<u8> {
        (0..n).map(|_| self.next() as u8).collect()
    }

    /// `n` words.
    pub fn words(&mut self, n: usize) -> Vec<u64> {
        (0..n).map(|_| self.next()).collect()
    }

    /// A bit string of `n` bits.
    pub fn bits(&mut self, n: usize) -> Bits {
        Bits::from_words(self.words(n.div_ceil(64)), n)
    }
}

/// `n` pseudo-random bits from `seed` (shorthand for tests).
pub fn bits(seed: u64, n: usize) -> Bits {
    Pseudo::new(seed).bits(n)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn marsaglia_sequence() {
        // The recurrence by hand from state 1: x ^= x << 13 gives 0x2001,
        // x ^= x >> 7 gives 0x2041, x ^= x << 17 gives 0x4082_2041.
        let mut p = Pseudo::new(1);
        assert_eq!(p.next(), 0x4082_2041);
        let mut z = Pseudo(0);
        assert_ne!(z.next(), 0, "a zero state must not stick");
        let b = bits(7, 130);
        assert_eq!(b.len(), 130);
        assert_eq!(bits(7, 130), b, "seeded: replayable");
        assert_ne!(bits(8, 130), b);
    }
}

//! Carry-less multiplication kernels and the choice between them.
//!
//! [`Backend::detect`] picks the widest kernel the CPU supports (from the
//! process's one [`Platform`](super::Platform)); plans
//! store the result and every call is a plain `match`. Every backend gives the
//! same bits as [`portable`], which the tests check on random operands.

#[cfg(target_arch = "x86_64")]
pub mod pclmul;
pub mod portable;
#[cfg(target_arch = "x86_64")]
pub mod vpclmul;
#[cfg(target_arch = "x86_64")]
pub mod vpclmul256;

/// A carry-less multiplication kernel.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Backend {
    /// Plain Rust, any CPU.
    Portable,
    /// x86-64 PCLMULQDQ, one 64 x 64 product per instruction.
    Pclmul,
    /// x86-64 AVX-512 VPCLMULQDQ, four 64 x 64 products per instruction.
    Vpclmul,
    /// x86-64 AVX2 VPCLMULQDQ on 256-bit registers, two 64 x 64 products per
    /// instruction (CPUs with VPCLMULQDQ but no AVX-512).
    Vpclmul256,
}

impl Backend {
    /// The fastest backend this CPU supports (honouring the test-only
    /// features `no_vpclmul`, which disables both VPCLMULQDQ backends, and
    /// `no_pclmul`).
    pub fn detect() -> Backend {
        super::Platform::get().backend()
    }

    /// Every backend this CPU supports, portable first.
    pub fn all_supported() -> Vec<Backend> {
        [
            Backend::Portable,
            Backend::Pclmul,
            Backend::Vpclmul256,
            Backend::Vpclmul,
        ]
        .into_iter()
        .filter(|b| b.is_supported())
        .collect()
    }

    /// Whether this CPU can run the backend.
    pub fn is_supported(self) -> bool {
        super::Platform::get().supports(self)
    }

    /// Short lower-case name, as used on the command line and in benches.
    pub fn name(self) -> &'static str {
        match self {
            Backend::Portable => "portable",
            Backend::Pclmul => "pclmul",
            Backend::Vpclmul => "vpclmul",
            Backend::Vpclmul256 => "vpclmul256",
        }
    }

    /// Carry-less product of two words with this backend: `(low, high)`.
    ///
    /// # Panics
    /// If the CPU does not support the backend.
    #[inline]
    pub fn clmul64(self, a: u64, b: u64) -> (u64, u64) {
        match self {
            Backend::Portable => portable::clmul64(a, b),
            #[cfg(target_arch = "x86_64")]
            Backend::Pclmul | Backend::Vpclmul | Backend::Vpclmul256 => {
                assert!(self.is_supported(), "backend {} not supported", self.name());
                // SAFETY: is_supported() checked pclmulqdq and sse2 just above.
                unsafe { pclmul::clmul64(a, b) }
            }
            #[cfg(not(target_arch = "x86_64"))]
            _ => unreachable!("backend {} exists only on x86-64", self.name()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Bit-by-bit definition of the carry-less product (oracle).
    fn clmul_oracle(a: u64, b: u64) -> u128 {
        let mut r = 0u128;
        for i in 0..64 {
            if (b >> i) & 1 == 1 {
                r ^= (a as u128) << i;
            }
        }
        r
    }

    #[test]
    fn every_backend_matches_the_oracle() {
        let mut x = 0x9e37_79b9_7f4a_7c15u64;
        let mut next = || {
            // xorshift64*: deterministic test operands (common practice)
            x ^= x >> 12;
            x ^= x << 25;
            x ^= x >> 27;
            x.wrapping_mul(0x2545_f491_4f6c_dd1d)
        };
        let edges = [0u64, 1, 2, 1 << 63, u64::MAX, 0x8000_0000_0000_0001];
        for be in Backend::all_supported() {
            for &a in &edges {
                for &b in &edges {
                    let (lo, hi) = be.clmul64(a, b);
                    assert_eq!(
                        (hi as u128) << 64 | lo as u128,
                        clmul_oracle(a, b),
                        "{be:?}"
                    );
                }
            }
            for _ in 0..10_000 {
                let (a, b) = (next(), next());
                let (lo, hi) = be.clmul64(a, b);
                assert_eq!(
                    (hi as u128) << 64 | lo as u128,
                    clmul_oracle(a, b),
                    "{be:?}"
                );
            }
        }
    }

    #[test]
    fn known_product() {
        // (z + 1)^2 = z^2 + 1 over GF(2): 0b11 * 0b11 = 0b101 (common practice).
        for be in Backend::all_supported() {
            assert_eq!(be.clmul64(3, 3), (5, 0));
            // z^63 * z^63 = z^126: bit 62 of the high word.
            assert_eq!(be.clmul64(1 << 63, 1 << 63), (0, 1 << 62));
        }
    }
}

//! GF(2^64) for the additive FFT: elements, products, the Cantor basis and
//! the evaluation points.
//!
//! An element is a `u64`, bit i the coefficient of `z^i`, modulo
//! `P(z) = z^64 + z^4 + z^3 + z + 1`, the field polynomial of degree 64 of
//! the project's table (`spec/conventions.md`, "Finite fields"; G. Seroussi,
//! "Table of low-weight binary irreducible polynomials", HPL-98-135, 1998).
//! The tests check its irreducibility with the project's independent
//! Rabin test.
//!
//! # The Cantor basis
//!
//! `beta_0 = 1` and `beta_i^2 + beta_i = beta_(i-1)` (D. G. Cantor, "On
//! arithmetical algorithms over finite fields", J. Combin. Theory A 50, 1989;
//! used for the additive FFT by S. Gao and T. Mateer, "Additive fast Fourier
//! transforms over finite fields", IEEE Trans. Inf. Theory 56(12), 2010). With
//! `s_1(y) = y^2 + y`, `s_1(beta_i) = beta_(i-1)` and `s_1(beta_0) = 0`, so the
//! subspace polynomial of `V_i = span(beta_0 .. beta_(i-1))` is the i-fold
//! composition `s_i = s_1 o ... o s_1`; it is linearised with binary
//! coefficients, `s_i(beta_j) = beta_(j-i)` for `j >= i`, and `s_i(beta_i) = 1`.
//! `s_63(y) = y + y^2 + ... + y^(2^63)` is the absolute trace, so `beta_63` is
//! any element of trace 1; we take the smallest one as an integer, and the
//! others follow by `beta_(i-1) = beta_i^2 + beta_i`.
//!
//! The evaluation points are `omega_u = XOR of beta_i over the set bits i of
//! u`, so `V_k = { omega_u : u < 2^k }`.

use std::sync::OnceLock;

/// The low part of `P(z)`: `z^64 = z^4 + z^3 + z + 1 (mod P)`.
pub const P_LOW: u64 = 0x1b;

/// Reduces `hi z^64 + lo` modulo `P`.
///
/// `hi z^64 = hi (z^4 + z^3 + z + 1)`; that product has at most 68 bits: the
/// low 64 are `hi ^ hi << 1 ^ hi << 3 ^ hi << 4`, the four above are
/// `g = hi >> 63 ^ hi >> 61 ^ hi >> 60`, and `g z^64 = g (z^4 + z^3 + z + 1)`
/// fits in 8 bits. By linearity both folds are one: `h = hi ^ g`.
#[inline]
pub fn reduce(lo: u64, hi: u64) -> u64 {
    let h = hi ^ (hi >> 63) ^ (hi >> 61) ^ (hi >> 60);
    lo ^ h ^ (h << 1) ^ (h << 3) ^ (h << 4)
}

/// The field product, portable (no carry-less instruction).
#[inline]
pub fn mul(a: u64, b: u64) -> u64 {
    let (lo, hi) = crate::gf2::clmul::portable::clmul64(a, b);
    reduce(lo, hi)
}

/// The absolute trace `a + a^2 + a^4 + ... + a^(2^63)` (0 or 1).
pub fn trace(a: u64) -> u64 {
    let mut t = a;
    let mut x = a;
    for _ in 1..64 {
        x = mul(x, x);
        t ^= x;
    }
    t
}

/// Evaluation points and Cantor basis, built once per process.
pub struct Points {
    /// The Cantor basis `beta_0 .. beta_63`.
    pub beta: [u64; 64],
    /// `omega_u` for the low 16 bits of u.
    lo: Vec<u64>,
    /// `omega_(u << 16)` for the next 16 bits of u.
    hi: Vec<u64>,
}

impl Points {
    /// The process-wide table.
    pub fn get() -> &'static Points {
        static POINTS: OnceLock<Points> = OnceLock::new();
        POINTS.get_or_init(Points::build)
    }

    fn build() -> Points {
        // The trace is linear, so the smallest integer of trace 1 is the
        // lowest power z^i of trace 1 (for this P, Tr(z^i) = 0 for i < 61 by
        // Newton's identities: P has no terms between z^4 and z^64).
        let top = (0..64)
            .map(|i| 1u64 << i)
            .find(|&a| trace(a) == 1)
            .expect("the trace is not identically zero");
        let mut beta = [0u64; 64];
        beta[63] = top;
        for i in (1..64).rev() {
            beta[i - 1] = mul(beta[i], beta[i]) ^ beta[i];
        }
        assert_eq!(beta[0], 1, "Cantor basis: beta_0 must be 1");
        let span = |base: usize| -> Vec<u64> {
            let mut t = vec![0u64; 1 << 16];
            for u in 1..(1usize << 16) {
                let i = u.trailing_zeros() as usize;
                t[u] = t[u & (u - 1)] ^ beta[base + i];
            }
            t
        };
        Points {
            beta,
            lo: span(0),
            hi: span(16),
        }
    }

    /// `omega_u` for `u < 2^32`.
    #[inline]
    pub fn omega(&self, u: usize) -> u64 {
        debug_assert!(u < 1 << 32);
        self.lo[u & 0xffff] ^ self.hi[u >> 16]
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::gf2::reference::clmul_bitwise;

    /// Bit-by-bit reduction of a 128-bit product by P (the definition).
    fn reduce_bitwise(mut v: u128) -> u64 {
        for i in (64..128).rev() {
            if (v >> i) & 1 == 1 {
                v ^= (1u128 << i) | ((P_LOW as u128) << (i - 64));
            }
        }
        v as u64
    }

    #[test]
    fn field_polynomial_is_the_tables_and_irreducible() {
        // Irreducibility by the project's Rabin test (independent of the
        // table generator, which uses Ben-Or's).
        assert!(crate::gf2::field::search::is_irreducible_rabin(&[
            64, 4, 3, 1, 0
        ]));
        let p = crate::gf2::field::FieldPoly::for_degree(64).unwrap();
        assert_eq!(p.middle_exponents(), &[4, 3, 1]);
    }

    #[test]
    fn product_matches_bitwise_definition() {
        let mut s = 0x1234_5678_9abc_def1u64;
        for _ in 0..20_000 {
            s ^= s << 13;
            s ^= s >> 7;
            s ^= s << 17;
            let a = s;
            let b = s.rotate_left(29) ^ 0x5555;
            assert_eq!(mul(a, b), reduce_bitwise(clmul_bitwise(a, b)));
        }
        for a in [0u64, 1, u64::MAX, 1 << 63] {
            for b in [0u64, 1, u64::MAX, 1 << 63] {
                assert_eq!(mul(a, b), reduce_bitwise(clmul_bitwise(a, b)));
            }
        }
    }

    #[test]
    fn cantor_basis_has_its_defining_properties() {
        let p = Points::get();
        assert_eq!(p.beta[0], 1);
        for i in 1..64 {
            assert_eq!(mul(p.beta[i], p.beta[i]) ^ p.beta[i], p.beta[i - 1]);
        }
        assert_eq!(trace(p.beta[63]), 1);
        // Linear independence over GF(2): Gaussian elimination.
        let mut rows = p.beta.to_vec();
        let mut rank = 0;
        for bit in (0..64).rev() {
            if let Some(i) = (rank..64).find(|&i| (rows[i] >> bit) & 1 == 1) {
                rows.swap(rank, i);
                for j in 0..64 {
                    if j != rank && (rows[j] >> bit) & 1 == 1 {
                        rows[j] ^= rows[rank];
                    }
                }
                rank += 1;
            }
        }
        assert_eq!(rank, 64);
        // omega is the span, in order.
        for u in [0usize, 1, 2, 3, 0xffff, 0x10000, 0x12345, (1 << 32) - 1] {
            let direct = (0..32)
                .filter(|i| (u >> i) & 1 == 1)
                .fold(0, |a, i| a ^ p.beta[i]);
            assert_eq!(p.omega(u), direct, "u = {u}");
        }
    }
}

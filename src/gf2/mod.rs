//! Arithmetic over GF(2): carry-less products of word-packed polynomials.
//!
//! A polynomial `a_0 + a_1 z + ...` is a slice of `u64` words with
//! coefficient i at bit `i mod 64` of word `i / 64` (the layout of
//! [`crate::bits::Bits`]).

pub mod clmul;

pub use clmul::Backend;
pub mod field;

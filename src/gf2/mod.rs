//! Arithmetic over GF(2): carry-less products of word-packed polynomials.
//!
//! A polynomial `a_0 + a_1 z + ...` is a slice of `u64` words with
//! coefficient i at bit `i mod 64` of word `i / 64` (the layout of
//! [`crate::bits::Bits`]).
//!
//! * [`clmul`]: 64 x 64 -> 128 kernels (portable, PCLMULQDQ, VPCLMULQDQ) and
//!   run-time detection.
//! * [`platform`]: the one CPU-feature detection of the process.
//! * [`karatsuba`]: full products and the word-level middle product.
//! * [`middle`]: the Toeplitz window `[n-1, n+m-1)` of `S(z) X(z)`, planned
//!   once per size, with the seed prepared once.
//! * [`fft`]: the same window by floating-point convolution, with a proven
//!   rounding bound.
//! * [`reference`]: slow oracles for the tests.

pub mod afft;
pub mod clmul;
pub mod fft;
pub mod karatsuba;
pub mod middle;
#[doc(hidden)]
pub mod outside;
pub mod platform;
pub mod reference;
pub mod window;

pub use clmul::Backend;
pub use platform::Platform;
pub mod field;

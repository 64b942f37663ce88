//! sluice: randomness extraction with a proof-backed error figure.
//!
//! Raw bits from a certified source are only partly random; a seeded
//! extractor turns them into bits that are close to uniform, with an error
//! that follows from the source's smooth min-entropy (see the planning and
//! certification modules). This crate holds the pure maths (bit strings,
//! carry-less products, the extractors) and, above it, the I/O that runs them.
//!
//! ```
//! use sluice::bits::Bits;
//! use sluice::extract::{Extractor, Toeplitz};
//!
//! // spec/hashing-and-composition.md 3.4: Toeplitz, n = 16, m = 8.
//! let x = Bits::from_ascii("0111101101101111").unwrap();
//! let seed = Bits::from_ascii("00101011010101110010011").unwrap();
//! let plan = Toeplitz::new(16, 8).unwrap();
//! let mut y = Bits::zeros(8);
//! plan.extract(&x, &seed, &mut y);
//! assert_eq!(y.to_ascii(), "00101010");
//! ```
//!
//! Test-only cargo features (unstable): `no_vpclmul` and `no_pclmul` disable
//! run-time detection of those kernels, so the portable path can be tested.

#![warn(missing_docs)]

pub mod assess;
pub mod bits;
pub mod certify;
pub mod extract;
pub mod files;
pub mod gf2;
pub mod ledger;
pub mod pipeline;
pub mod plan;
pub mod seed;
pub mod vectors;

//! Statistical assessment of raw input and extracted output (pure: no I/O).
//!
//! - [`special`]: erfc, igamc and Φ from `statrs` (statistics.md section 1).
//! - [`sp800_22`]: the 15 tests of NIST SP 800-22 Rev. 1a and a battery
//!   that applies the standard's parameter rules (statistics.md 2, 3, 8).
//! - [`many`]: over many sequences, the proportion passing with its
//!   confidence interval and the uniformity of the P-values (SP 800-22
//!   section 4.2; statistics.md 4).
//! - [`sp800_90b`]: the continuous health tests and the min-entropy
//!   estimators for binary samples of NIST SP 800-90B (statistics.md 5).
//!
//! Statistical tests cannot certify randomness: they can only fail to find
//! a defect. Only the entropy certification and the extractor's proof give
//! a guarantee.

#![forbid(unsafe_code)]

mod error;
pub mod many;
pub mod sp800_22;
pub mod sp800_90b;
pub mod special;

pub use error::{Error, ErrorKind};

//! Security planning: output lengths, seed lengths and the one total error.
//!
//! Every number this module certifies is a pure function of its inputs whose
//! doc comment names its section in `spec/hashing-and-composition.md` or
//! `spec/trevisan.md` and the source that section cites. Nothing here does
//! I/O, except [`measure`], which only reads the clock to calibrate the
//! speed model of the selector (and is kept apart for that reason).
//!
//! - [`lhl`]: two-universal hashing (Toeplitz, modified Toeplitz) under the
//!   leftover hash lemma with quantum side information, conservative form.
//! - [`trevisan`]: the deterministic parameter search for Trevisan-type
//!   extractors (one-bit extractor PH or IP, weak design POLY or BLOCK).
//! - [`two_source`]: the cyclic-shift two-source extractor's bounds.
//! - [`compose`]: weak seeds, many blocks with one seed, recycled seeds,
//!   near-uniform seeds and the one total error of a run.
//! - [`select`]: evaluates every construction for one set of security
//!   inputs and picks one for an objective.
//! - [`round`]: the rounding rules (errors up, lengths and budgets down).
//!
//! Conventions (`spec/hashing-and-composition.md` 0): logarithms are base 2;
//! `n` is an input length, `m` an output length, `d` a seed length, `k` a
//! smooth min-entropy in bits (real), every error a trace distance.

#![forbid(unsafe_code)]

mod error;

pub mod compose;
pub mod lhl;
pub mod measure;
pub mod round;
pub mod select;
pub mod trevisan;
pub mod two_source;

pub use error::{Error, ErrorKind};

/// Checks `0 < eps < 1` for an error parameter named `field`.
pub(crate) fn check_open_unit(field: &'static str, eps: f64) -> Result<(), Error> {
    if eps.is_finite() && eps > 0.0 && eps < 1.0 {
        Ok(())
    } else {
        Err(Error::new(
            field,
            ErrorKind::OutOfRange {
                value: eps,
                expected: "strictly between 0 and 1",
            },
        ))
    }
}

/// Checks `0 <= eps < 1` for a term that may be zero (smoothing, certificate,
/// seed closeness).
pub(crate) fn check_half_open_unit(field: &'static str, eps: f64) -> Result<(), Error> {
    if eps.is_finite() && (0.0..1.0).contains(&eps) {
        Ok(())
    } else {
        Err(Error::new(
            field,
            ErrorKind::OutOfRange {
                value: eps,
                expected: "at least 0 and below 1",
            },
        ))
    }
}

/// Checks `n >= 1` and `0 <= k <= n` (`spec/hashing-and-composition.md` 2.5).
pub(crate) fn check_entropy(n: u64, k: f64) -> Result<(), Error> {
    if n == 0 {
        return Err(Error::new("n", ErrorKind::Zero));
    }
    if !k.is_finite() || k < 0.0 {
        return Err(Error::new(
            "k",
            ErrorKind::OutOfRange {
                value: k,
                expected: "a finite number of bits, at least 0",
            },
        ));
    }
    if k > n as f64 {
        return Err(Error::new("k", ErrorKind::EntropyAboveLength { k, n }));
    }
    Ok(())
}

/// `log2(1/x)` for `0 < x`.
#[inline]
pub(crate) fn log_inv(x: f64) -> f64 {
    -x.log2()
}

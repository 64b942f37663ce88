//! Seeded extractors behind one trait.
//!
//! Every extractor is *planned once* for its sizes (and backend) and then run
//! on many blocks: [`Extractor::extract`] takes one input block and a seed and
//! writes the output without allocating (scratch space lives in the plan and
//! is reused). When many blocks share a seed, [`Extractor::with_seed`] binds
//! it once so that seed-dependent work (an aligned copy, its FFT spectrum) is
//! done once.
//!
//! The definitions of the functions computed here, down to the bit, are in
//! `spec/conventions.md`; each extractor has a slow, obviously correct twin in
//! [`reference`] that the tests compare it with.

#![forbid(unsafe_code)]

pub mod modified_toeplitz;
pub mod reference;
pub mod spec;
pub mod toeplitz;
pub mod trevisan;
pub mod two_source;
pub mod whole_run;

pub use modified_toeplitz::ModifiedToeplitz;
pub use spec::ExtractorSpec;
pub use toeplitz::Toeplitz;
pub use two_source::{TwoSource, TwoSourceError};

use crate::bits::Bits;
use std::sync::atomic::{AtomicU64, Ordering};
use std::sync::Mutex;

pub use crate::gf2::window::{Engine, Thresholds};

/// Why an extractor cannot be planned.
#[derive(Debug, thiserror::Error, PartialEq, Eq)]
pub enum Error {
    /// n = 0.
    #[error("{family}: the input length must be at least 1 bit")]
    EmptyInput {
        /// The family.
        family: &'static str,
    },
    /// m outside the family's range.
    #[error("{family}: output length {m} is outside 1..={max} for an input of {n} bits")]
    OutputLength {
        /// The family.
        family: &'static str,
        /// Input bits.
        n: usize,
        /// Requested output bits.
        m: usize,
        /// Largest allowed.
        max: usize,
    },
    /// The engine does not run on this CPU.
    #[error("engine {0} is not supported on this CPU")]
    Unsupported(Engine),
    /// The FFT rounding bound does not cover the size.
    #[error("the FFT engine does not cover n = {n}, m = {m} (its rounding bound would not rule out a flipped bit); use a carry-less engine")]
    FftTooLarge {
        /// Input bits.
        n: usize,
        /// Output bits.
        m: usize,
    },
    /// Too large for one block of the additive FFT.
    #[error("n = {n}, m = {m} is too large for one block (more than 2^32 transform points)")]
    TooLarge {
        /// Input bits.
        n: usize,
        /// Output bits.
        m: usize,
    },
}

impl From<crate::gf2::window::WindowError> for Error {
    fn from(e: crate::gf2::window::WindowError) -> Error {
        use crate::gf2::window::WindowError as W;
        match e {
            W::Unsupported(engine) => Error::Unsupported(engine),
            W::FftTooLarge { n, m } => Error::FftTooLarge { n, m },
            W::TooLarge { n, m } => Error::TooLarge { n, m },
        }
    }
}

/// A seeded extractor `Ext: {0,1}^n x {0,1}^d -> {0,1}^m`, planned for fixed
/// n, m and d.
pub trait Extractor: Send + Sync {
    /// Name of the construction as used on the command line
    /// (`toeplitz`, `modified-toeplitz`, ...).
    fn name(&self) -> &'static str;
    /// Input length n in bits.
    fn input_bits(&self) -> usize;
    /// Output length m in bits.
    fn output_bits(&self) -> usize;
    /// Seed length d in bits.
    fn seed_bits(&self) -> usize;
    /// The product engine, for the families that have one (Toeplitz and
    /// modified Toeplitz: the whole-run path plans with it).
    fn engine(&self) -> Option<Engine> {
        None
    }
    /// Extracts one block.
    ///
    /// # Panics
    /// If `input`, `seed` or `out` does not have the planned length (a caller
    /// bug, reported with expected and actual lengths).
    fn extract(&self, input: &Bits, seed: &Bits, out: &mut Bits);
    /// Binds a seed for many blocks; seed-dependent precomputation happens
    /// here, once.
    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a>;
    /// [`extract`](Self::extract), reporting output bits done to
    /// `progress` while it runs; the reports add up to the output length.
    /// The default reports once, at the end; extractors that take long on
    /// one block (Trevisan) report as they go.
    fn extract_with_progress(
        &self,
        input: &Bits,
        seed: &Bits,
        out: &mut Bits,
        progress: &dyn Progress,
    ) {
        self.extract(input, seed, out);
        progress.add(out.len() as u64);
    }
}

/// An extractor with its seed bound (see [`Extractor::with_seed`]).
pub trait SeededExtractor: Send + Sync {
    /// Extracts one block with the bound seed.
    fn extract(&self, input: &Bits, out: &mut Bits);
    /// [`extract`](Self::extract), reporting output bits done to
    /// `progress` (see [`Extractor::extract_with_progress`]).
    fn extract_with_progress(&self, input: &Bits, out: &mut Bits, progress: &dyn Progress) {
        self.extract(input, out);
        progress.add(out.len() as u64);
    }
}

/// Where an extractor reports progress inside one block: `add(k)` says that
/// k more output bits are done. Called from worker threads, so it must be
/// cheap and must not allocate; reports carry counts only, never bits.
pub trait Progress: Sync {
    /// k more output bits are done.
    fn add(&self, output_bits: u64);
}

/// A counter that the caller polls from another thread.
impl Progress for AtomicU64 {
    #[inline]
    fn add(&self, output_bits: u64) {
        self.fetch_add(output_bits, Ordering::Relaxed);
    }
}

/// Ignores every report.
#[derive(Clone, Copy, Debug, Default)]
pub struct NoProgress;

impl Progress for NoProgress {
    #[inline]
    fn add(&self, _output_bits: u64) {}
}

/// Binds a seed without precomputation (for extractors that need none).
pub struct Unprepared<'a, E: ?Sized> {
    ext: &'a E,
    seed: &'a Bits,
}

impl<'a, E: Extractor + ?Sized> Unprepared<'a, E> {
    /// Wraps `ext` and `seed`.
    pub fn new(ext: &'a E, seed: &'a Bits) -> Self {
        check_len("seed", ext.seed_bits(), seed.len());
        Unprepared { ext, seed }
    }
}

impl<E: Extractor + ?Sized> SeededExtractor for Unprepared<'_, E> {
    fn extract(&self, input: &Bits, out: &mut Bits) {
        self.ext.extract(input, self.seed, out)
    }

    fn extract_with_progress(&self, input: &Bits, out: &mut Bits, progress: &dyn Progress) {
        self.ext
            .extract_with_progress(input, self.seed, out, progress)
    }
}

/// A pool of scratch buffers, so that `&self` plans can run on several
/// threads at once: each call takes a buffer (allocating only the first time
/// a thread needs one) and gives it back.
#[derive(Default)]
pub struct ScratchPool<T> {
    free: Mutex<Vec<T>>,
}

impl<T> ScratchPool<T> {
    /// An empty pool.
    pub fn new() -> Self {
        ScratchPool {
            free: Mutex::new(Vec::new()),
        }
    }

    /// Runs `f` with a buffer from the pool (made by `make` if none is free).
    pub fn with<R>(&self, make: impl FnOnce() -> T, f: impl FnOnce(&mut T) -> R) -> R {
        let taken = self.free.lock().unwrap_or_else(|p| p.into_inner()).pop();
        let mut buf = taken.unwrap_or_else(make);
        let r = f(&mut buf);
        self.free
            .lock()
            .unwrap_or_else(|p| p.into_inner())
            .push(buf);
        r
    }
}

/// Panics with expected and actual lengths when they differ (caller bug);
/// it lives in `bits` (floor 1), so every layer can use it.
pub use crate::bits::check_len;

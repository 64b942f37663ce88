//! Calibration of the selector's speed model by a short measurement on this
//! machine.
//!
//! This is the one part of `plan` that is not pure: it reads the clock. It
//! does no other I/O (caching the result in a file is the command line's
//! job). Each unit of work ([`WorkUnit`]) is priced by timing a few
//! milliseconds of real work:
//!
//! - the Toeplitz families: an extractor plan from `crate::extract`, made by
//!   a factory the caller passes, at a small size; the time is divided by the
//!   `N log2 N` work of [`select::work_per_block`](super::select::work_per_block);
//! - Trevisan PH and IP (no extractor plan needed): the kernels their cost is
//!   counted in by `spec/trevisan.md` 7, that is the carry-less 64 x 64
//!   product of `crate::gf2` (with a reduction share) and the 64-bit
//!   AND-and-parity word.
//!
//! Inputs and seeds used for timing are fixed pseudo-random words (not
//! secrets).

use super::select::{ThroughputModel, WorkUnit};
use crate::bits::Bits;
use crate::extract::Extractor;
use crate::gf2::Backend;
use std::hint::black_box;
use std::time::{Duration, Instant};

/// Input length used to time the hashing extractors.
pub const HASH_N: usize = 1 << 14;
/// Output length used to time the hashing extractors.
pub const HASH_M: usize = HASH_N / 2;

/// One calibrated unit.
#[derive(Clone, Debug, PartialEq, serde::Serialize, serde::Deserialize)]
pub struct Entry {
    /// The unit of work.
    pub unit: WorkUnit,
    /// Seconds per unit on this machine.
    pub seconds_per_unit: f64,
    /// How it was measured, in words.
    pub how: String,
}

/// A calibrated speed model.
#[derive(Clone, Debug, PartialEq, Default, serde::Serialize, serde::Deserialize)]
pub struct Calibration {
    /// The units measured (at most one entry per unit).
    pub entries: Vec<Entry>,
}

impl ThroughputModel for Calibration {
    fn seconds_per_unit(&self, unit: WorkUnit) -> Option<f64> {
        self.entries
            .iter()
            .find(|e| e.unit == unit)
            .map(|e| e.seconds_per_unit)
    }
}

/// Fixed timing data (the crate's one test generator).
fn words(seed: u64, n: usize) -> Bits {
    crate::bits::pseudo::bits(seed | 1, n)
}

/// Median seconds of `f` over runs within `budget` (at least 3 runs, at
/// most 1000).
fn median_time(budget: Duration, mut f: impl FnMut()) -> f64 {
    let start = Instant::now();
    let mut times = Vec::new();
    while times.len() < 3 || (start.elapsed() < budget && times.len() < 1000) {
        let t = Instant::now();
        f();
        times.push(t.elapsed().as_secs_f64());
    }
    times.sort_by(f64::total_cmp);
    times[times.len() / 2]
}

/// Median seconds per block of `ext` on fixed pseudo-random input and seed,
/// timed for about `budget`.
pub fn time_extractor(ext: &dyn Extractor, budget: Duration) -> f64 {
    let x = words(1, ext.input_bits());
    let seed = words(2, ext.seed_bits());
    let mut out = Bits::zeros(ext.output_bits());
    ext.extract(&x, &seed, &mut out); // warm-up (first-use allocations)
    median_time(budget, || {
        ext.extract(black_box(&x), black_box(&seed), &mut out);
        black_box(&out);
    })
}

/// Reduction share of a GF(2^l) multiplication, as a multiple of the
/// product's carry-less multiplications ("a few shifts and XORs per word",
/// `spec/trevisan.md` 7): an estimate, not a measurement.
pub const REDUCTION_FACTOR: f64 = 1.5;

/// Seconds per carry-less 64 x 64 product with accumulation on `backend`,
/// timed for about `budget`.
pub fn time_clmul(backend: Backend, budget: Duration) -> f64 {
    const BATCH: usize = 4096;
    let a = words(3, 64 * BATCH);
    let b = words(4, 64 * BATCH);
    let t = median_time(budget, || {
        let mut acc = 0u64;
        for (x, y) in a.words().iter().zip(b.words()) {
            let (lo, hi) = backend.clmul64(*x, *y);
            acc ^= lo ^ hi.rotate_left(7);
        }
        black_box(acc);
    });
    t / BATCH as f64
}

/// Seconds per 64-bit AND-and-parity word (IP), timed for about `budget`.
pub fn time_and_parity(budget: Duration) -> f64 {
    const BATCH: usize = 1 << 16;
    let a = words(5, 64 * BATCH);
    let b = words(6, 64 * BATCH);
    let t = median_time(budget, || {
        let mut acc = 0u32;
        for (x, y) in a.words().iter().zip(b.words()) {
            acc ^= (x & y).count_ones();
        }
        black_box(acc & 1);
    });
    t / BATCH as f64
}

/// A factory of extractor plans for the hashing units: given the unit and
/// `(n, m)`, returns a plan, or `None` if `crate::extract` has none yet.
pub type Factory<'a> = dyn Fn(WorkUnit, usize, usize) -> Option<Box<dyn Extractor>> + 'a;

/// Calibrates every unit, spending about `budget` on each: the hashing
/// units through `factory` at `n = HASH_N`, `m = HASH_M` (units whose
/// factory gives no plan are left out), the Trevisan units through the
/// kernels of `crate::gf2` (detected backend).
pub fn calibrate(factory: &Factory<'_>, budget: Duration) -> Calibration {
    let mut entries = Vec::new();
    for (unit, a) in [
        (WorkUnit::ToeplitzProduct, HASH_N),
        (WorkUnit::ModifiedToeplitzProduct, HASH_N - HASH_M),
    ] {
        if let Some(ext) = factory(unit, HASH_N, HASH_M) {
            let t = time_extractor(ext.as_ref(), budget);
            let work = crate::plan::select::hash_work(a as u64, HASH_M as u64);
            entries.push(Entry {
                unit,
                seconds_per_unit: t / work,
                how: format!(
                    "timed the {} extractor at n = {HASH_N}, m = {HASH_M}",
                    ext.name()
                ),
            });
        }
    }
    let backend = Backend::detect();
    entries.push(Entry {
        unit: WorkUnit::ClmulProduct,
        seconds_per_unit: time_clmul(backend, budget) * (1.0 + REDUCTION_FACTOR),
        how: format!(
            "timed the {} carry-less product; reduction estimated as {REDUCTION_FACTOR} times it",
            backend.name()
        ),
    });
    entries.push(Entry {
        unit: WorkUnit::AndParityWord,
        seconds_per_unit: time_and_parity(budget),
        how: "timed 64-bit AND and parity".to_string(),
    });
    Calibration { entries }
}

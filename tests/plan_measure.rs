//! The speed calibration runs real work through the `Extractor` trait and
//! turns it into a model the selector can use. No speed is asserted (speed
//! targets live in benchmarks); the checks are that the factory is asked for
//! the sizes the model assumes, that the extractor really runs, and that the
//! resulting prices are positive and used by the selector.

use sluice::bits::Bits;
use sluice::extract::{check_len, Extractor, SeededExtractor, Unprepared};
use sluice::plan::compose::Budget;
use sluice::plan::measure::{self, HASH_M, HASH_N};
use sluice::plan::select::{
    self, EntropyScope, Objective, SelectorInput, ThroughputModel, WorkUnit,
};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Arc;
use std::time::Duration;

/// A tiny stand-in extractor: output bit i is the parity of input bit i and
/// seed bit i (not an extractor of any quality; only its run time matters).
struct Tiny {
    n: usize,
    m: usize,
    calls: Arc<AtomicUsize>,
}

impl Extractor for Tiny {
    fn name(&self) -> &'static str {
        "tiny"
    }
    fn input_bits(&self) -> usize {
        self.n
    }
    fn output_bits(&self) -> usize {
        self.m
    }
    fn seed_bits(&self) -> usize {
        self.m
    }
    fn extract(&self, input: &Bits, seed: &Bits, out: &mut Bits) {
        check_len("input", self.n, input.len());
        check_len("seed", self.m, seed.len());
        check_len("output", self.m, out.len());
        for i in 0..self.m {
            out.set(i, input.get(i) ^ seed.get(i));
        }
        self.calls.fetch_add(1, Ordering::Relaxed);
    }
    fn with_seed<'a>(&'a self, seed: &'a Bits) -> Box<dyn SeededExtractor + 'a> {
        Box::new(Unprepared::new(self, seed))
    }
}

#[test]
fn calibration_times_the_extractor_through_the_trait() {
    let calls = Arc::new(AtomicUsize::new(0));
    let asked = Arc::new(AtomicUsize::new(0));
    let factory = {
        let calls = calls.clone();
        let asked = asked.clone();
        move |unit: WorkUnit, n: usize, m: usize| -> Option<Box<dyn Extractor>> {
            assert_eq!((n, m), (HASH_N, HASH_M));
            asked.fetch_add(1, Ordering::Relaxed);
            (unit == WorkUnit::ToeplitzProduct).then(|| {
                Box::new(Tiny {
                    n,
                    m,
                    calls: calls.clone(),
                }) as Box<dyn Extractor>
            })
        }
    };
    let cal = measure::calibrate(&factory, Duration::from_millis(2));
    assert_eq!(
        asked.load(Ordering::Relaxed),
        2,
        "one request per hashing unit"
    );
    assert!(
        calls.load(Ordering::Relaxed) >= 4,
        "warm-up plus at least 3 timed runs"
    );
    let t = cal.seconds_per_unit(WorkUnit::ToeplitzProduct).unwrap();
    assert!(t.is_finite() && t > 0.0);
    assert!(cal.entries[0].how.contains("tiny"));
    // No plan for the modified family: that unit stays unmeasured.
    assert_eq!(
        cal.seconds_per_unit(WorkUnit::ModifiedToeplitzProduct),
        None
    );
    for u in [WorkUnit::ClmulProduct, WorkUnit::AndParityWord] {
        let s = cal.seconds_per_unit(u).unwrap();
        assert!(s.is_finite() && s > 0.0, "{u:?}");
    }
    // The selector uses the prices: the Toeplitz row gets a time, the
    // modified one does not, so `fastest` refuses to choose.
    let input = SelectorInput {
        n: 1 << 16,
        k: 0.8 * 65536.0,
        scope: EntropyScope::PerBlock,
        can_abort: None,
        budget: Budget::single(1e-9, 1e-10),
        objective: Objective::Fastest,
    };
    let s = select::select(&input, &cal).unwrap();
    assert!(s.rows[0]
        .outcome
        .as_ref()
        .unwrap()
        .seconds_per_block
        .is_some());
    assert!(s.rows[1]
        .outcome
        .as_ref()
        .unwrap()
        .seconds_per_block
        .is_none());
    assert_eq!(s.chosen, None);
    // The calibration survives a round trip through JSON (the CLI's cache;
    // serde_json may change the last bit of a float).
    let text = serde_json::to_string(&cal).unwrap();
    let back: measure::Calibration = serde_json::from_str(&text).unwrap();
    assert_eq!(back.entries.len(), cal.entries.len());
    for (a, b) in back.entries.iter().zip(&cal.entries) {
        assert_eq!((a.unit, &a.how), (b.unit, &b.how));
        assert!((a.seconds_per_unit / b.seconds_per_unit - 1.0).abs() < 1e-12);
    }
}

//! The planner's Trevisan answer and the extractor it names agree: the
//! seed length the planner charges and reports is the one the extractor
//! built from the recorded integers asks for (issue: no test tied them).
//! Both come from one design code now (`extract::trevisan::design`); this
//! checks the whole path: search -> `Planned::spec` -> `ExtractorSpec::build`.

use proptest::prelude::*;
use sluice::extract::Engine;
use sluice::plan::compose::Budget;
use sluice::plan::select::EntropyScope;
use sluice::plan::select::{self, Construction, NoSpeeds, Objective, SelectorInput};
use sluice::plan::trevisan::{Design, OneBit};

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn planned_trevisan_seed_is_the_extractors(
        n in 256u64..(1 << 13),
        rate in 0.3f64..=1.0,
        variant in 0usize..4,
    ) {
        let (one_bit, design, c) = [
            (OneBit::Ph, Design::Poly, 1),
            (OneBit::Ph, Design::Poly, 4),
            (OneBit::Ph, Design::Block, 1),
            (OneBit::Ip, Design::Block, 1),
        ][variant];
        let input = SelectorInput {
            n,
            k: rate * n as f64,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget::single(1e-6, 1e-9),
            objective: Objective::MostOutput,
        };
        let cons = Construction::Trevisan { one_bit, design, c };
        let Ok(p) = select::plan_one(&cons, &input, &NoSpeeds) else { return Ok(()) };
        let spec = p.spec(&cons, n);
        prop_assert_eq!(spec.n as u64, n);
        prop_assert_eq!(spec.m as u64, p.m);
        let ext = spec.build(Engine::Auto).unwrap();
        prop_assert_eq!(ext.seed_bits() as u64, p.d, "{:?}", spec);
        prop_assert_eq!(ext.output_bits() as u64, p.m);
    }
}

/// The hashing families: seed n + m - 1 (Toeplitz) and n - 1 (modified),
/// hashing spec 3.1 and 3.2.
#[test]
fn planned_hash_seed_is_the_extractors() {
    use sluice::plan::lhl::Family;
    for family in [Family::Toeplitz, Family::ModifiedToeplitz] {
        let input = SelectorInput {
            n: 4096,
            k: 3000.0,
            scope: EntropyScope::PerBlock,
            can_abort: None,
            budget: Budget::single(1e-6, 1e-9),
            objective: Objective::MostOutput,
        };
        let cons = Construction::Hash { family };
        let p = select::plan_one(&cons, &input, &NoSpeeds).unwrap();
        let ext = p.spec(&cons, 4096).build(Engine::Auto).unwrap();
        assert_eq!(ext.seed_bits() as u64, p.d);
        let want = match family {
            Family::Toeplitz => 4096 + p.m - 1,
            Family::ModifiedToeplitz => 4095,
        };
        assert_eq!(p.d, want);
    }
}

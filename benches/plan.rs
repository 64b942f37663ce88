//! Planning speed: the selector evaluates every construction (six searches)
//! for one set of inputs; `sluice plan` runs it once per call.

use criterion::{black_box, criterion_group, criterion_main, Criterion};
use sluice::plan::compose::Budget;
use sluice::plan::select::{self, EntropyScope, NoSpeeds, Objective, SelectorInput};
use sluice::plan::trevisan::{self, Design, OneBit, TrevisanInputs};

fn input(log_n: u32) -> SelectorInput {
    let n = 1u64 << log_n;
    SelectorInput {
        n,
        k: 0.9 * n as f64,
        scope: EntropyScope::PerBlock,
        can_abort: None,
        budget: Budget::single(1e-12, 2.5e-13),
        objective: Objective::MostOutput,
    }
}

fn bench(c: &mut Criterion) {
    for log_n in [16u32, 20, 24] {
        let i = input(log_n);
        c.bench_function(&format!("select n=2^{log_n}"), |b| {
            b.iter(|| select::select(black_box(&i), &NoSpeeds).unwrap())
        });
    }
    let t = TrevisanInputs {
        n: 1 << 24,
        k_s: 0.9 * (1u64 << 24) as f64,
        budget: Budget::single(1e-12, 2.5e-13),
        one_bit: OneBit::Ph,
        design: Design::Block,
        c: 1,
    };
    c.bench_function("trevisan search PH+BLOCK n=2^24", |b| {
        b.iter(|| trevisan::search(black_box(&t)).unwrap())
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .sample_size(20)
        .warm_up_time(std::time::Duration::from_millis(300))
        .measurement_time(std::time::Duration::from_secs(2));
    targets = bench
}
criterion_main!(benches);
